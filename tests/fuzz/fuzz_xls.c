/*
 * fuzz_xls.c: libFuzzer harness for the .xls reader (io/xls.c, over FreeXL
 * 1.0.6 and the reader's own compound-file and BIFF record scan). The
 * fuzzer's bytes are the file (kept in a memfd, read by path): the sheet
 * list, the first sheet, the sheet numbered by the first byte with the
 * header row from the second, and the encrypted-.xlsx check. A table that
 * is read is walked cell by cell. Crashes, sanitizer reports and broken
 * invariants (an error with an empty message, a table on error, a text
 * cell without text) are the findings. Build and run: tests/fuzz/README.md.
 */
#define _GNU_SOURCE  /* memfd_create: the file lives in memory, not on disk */
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/mman.h>
#include <unistd.h>

#include "../../io/xls.h"

#define FUZZ_NAME "fuzz_xls"
#include "fuzzutil.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);
const char *__lsan_default_suppressions(void);

/* FreeXL 1.0.6 leaks its read buffers when freexl_open fails part way,
 * even after freexl_close (seen under LeakSanitizer); that is upstream's,
 * so only leaks from rowfit's own code are findings here. */
const char *__lsan_default_suppressions(void)
{
    return "leak:libfreexl.so\n";
}


static void read_once(const char *sheet, uint32_t header)
{
    table *t = NULL;
    rf_warnings w = {0};
    rf_error e;
    memset(&e, 0, sizeof e);
    rf_status st = xls_read(path, "fuzz.xls", sheet, header, &t, &w, &e);
    if (st == RF_OK) {
        check(t != NULL, "ok without a table");
        walk(t);
    } else {
        check(t == NULL, "a table on error");
        check(e.status == st && e.message[0] != '\0',
              "an error without its record");
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
    if (xls_sheets(path, "fuzz.xls", &s, &n, &e) == RF_OK) {
        for (size_t i = 0; i < n; i++)
            check(s[i].name != NULL, "a sheet without a name");
        grid_sheets_free(s, n);
    } else {
        check(s == NULL && e.message[0] != '\0', "sheets: error record");
    }
    read_once(NULL, 0);
    if (size >= 2) {
        char num[8];
        snprintf(num, sizeof num, "%u", 1u + data[0] % 4);
        read_once(num, data[1] % 8);
    }
    (void)xls_is_encrypted_ooxml(path);
    return 0;
}
