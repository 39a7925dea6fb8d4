/*
 * fuzz_xlsx.c: libFuzzer harness for the .xlsx reader (io/xlsx.c and
 * io/zipxml.c). The fuzzer's bytes are the file (kept in a memfd, read by
 * path): xlsx_sheets, then xlsx_read of the first sheet and of the sheet
 * numbered by the last byte, each table walked cell by cell. Crashes,
 * sanitizer reports and broken invariants (an error with an empty message,
 * a table on error, a text cell without text) are the findings. Seeds:
 * tests/fuzz/corpus-xlsx/ (the fixtures of tests/data/ and tests/bad/).
 */
#define _GNU_SOURCE  /* memfd_create: the file lives in memory, not on disk */
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/mman.h>
#include <unistd.h>

#include "../../io/xlsx.h"

#define FUZZ_NAME "fuzz_xlsx"
#include "fuzzutil.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);


static void read_once(const char *sheet, uint32_t header)
{
    table *t = NULL;
    rf_warnings w = {0};
    rf_error e;
    memset(&e, 0, sizeof e);
    rf_status st = xlsx_read(path, "fuzz.xlsx", sheet, header, &t, &w, &e);
    if (st == RF_OK) {
        check(t != NULL, "ok without a table");
        walk(t);
    } else {
        check(t == NULL, "a table on error");
        check(e.status == st && e.message[0] != '\0', "error record");
    }
    table_free(t);
    error_warnings_clear(&w);
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    fuzz_write(data, size);
    grid_sheet *s = NULL;
    size_t n = 0;
    rf_error e;
    memset(&e, 0, sizeof e);
    if (xlsx_sheets(path, "fuzz.xlsx", &s, &n, &e) == RF_OK) {
        for (size_t i = 0; i < n; i++)
            check(s[i].name != NULL, "a sheet without a name");
    } else {
        check(s == NULL && e.message[0] != '\0', "sheets error record");
    }
    grid_sheets_free(s, n);
    read_once(NULL, 0);
    if (size > 0) {
        char num[8];
        snprintf(num, sizeof num, "%u", 1u + data[size - 1] % 3);
        read_once(num, data[size - 1] % 4);
    }
    return 0;
}
