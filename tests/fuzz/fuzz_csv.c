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

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

/* One in-memory file for the whole process; csv_read opens it by path. */
static int fd = -1;
static char path[64];

static void check(int ok, const char *what)
{
    if (!ok) {
        fprintf(stderr, "fuzz_csv: invariant broken: %s\n", what);
        abort();
    }
}

static void walk(const table *t)
{
    char buf[256];
    size_t nr = table_rows(t), nc = table_cols(t);
    check(nc > 0, "a table with no column");
    for (size_t c = 0; c < nc; c++) {
        const char *name = table_column_name(t, c);
        check(name != NULL, "a column without a name");
        check(table_find_column(t, name) == (long)c, "find_column");
        (void)table_kind_name(table_column_kind(t, c));
        check(table_column_blanks(t, c) <= nr, "more blanks than rows");
    }
    for (size_t r = 0; r < nr; r++) {
        (void)table_row_source(t, r);
        table_where(t, r, (size_t)-1, buf, sizeof buf);
        for (size_t c = 0; c < nc; c++) {
            cell_type ty = table_cell_type(t, r, c);
            const char *s = table_cell_text(t, r, c);
            if (ty == CELL_TEXT || ty == CELL_ERROR)
                check(s != NULL, "a text cell without text");
            else
                (void)table_cell_number(t, r, c);
            table_cell_show(t, r, c, buf, sizeof buf);
            check(memchr(buf, '\0', sizeof buf) != NULL, "cell_show");
            table_where(t, r, c, buf, sizeof buf);
        }
    }
}

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
    if (fd < 0) {
        fd = memfd_create("fuzz.csv", 0);
        if (fd < 0) {
            perror("memfd_create");
            abort();
        }
        snprintf(path, sizeof path, "/proc/self/fd/%d", fd);
    }
    if (ftruncate(fd, 0) != 0
        || (size > 0 && pwrite(fd, data, size, 0) != (ssize_t)size)) {
        perror("fuzz_csv: memfd");
        abort();
    }
    csv_options opt = { 0, 0 };
    read_once(&opt);
    if (size >= 2) {
        opt.delimiter = delims[data[0] % sizeof delims];
        opt.header_row = data[1] % 4;
        read_once(&opt);
    }
    return 0;
}
