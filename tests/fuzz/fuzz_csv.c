/*
 * fuzz_csv.c: libFuzzer harness for the CSV reader (io/csv.c). The
 * fuzzer's bytes are the file, read once with detection (delimiter and
 * header row found by the reader) and once with options taken from the
 * first two bytes; a table that is read is walked cell by cell through
 * every accessor a report uses. Crashes, sanitizer reports and broken
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

#include "../../io/csv.h"
#include "../../io/table.h"

#define FUZZ_NAME "fuzz_csv"
#include "fuzzutil.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

/* One in-memory file for the whole process; csv_read opens it by path. */

static void read_once(const csv_options *opt)
{
    table *t = NULL;
    rf_warnings w = {0};
    rf_error e;
    memset(&e, 0, sizeof e);
    rf_status st = csv_read(path, "fuzz.csv", opt, &t, &w, &e);
    if (st == RF_OK) {
        check(t != NULL, "ok without a table");
        walk(t);
    } else {
        check(t == NULL, "a table on error");
        check(e.status == st && e.message[0] != '\0',
              "an error without its record");
    }
    for (size_t i = 0; i < w.n; i++)
        check(w.items[i] != NULL && w.items[i][0] != '\0', "empty warning");
    table_free(t);
    error_warnings_clear(&w);
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    static const char delims[] = { 0, ',', ';', '\t', '|' };
    fuzz_write(data, size);
    csv_options opt = { 0, 0 };
    read_once(&opt);
    if (size >= 2) {
        opt.delimiter = delims[data[0] % sizeof delims];
        opt.header_row = data[1] % 4;
        read_once(&opt);
    }
    return 0;
}
