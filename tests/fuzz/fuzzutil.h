/*
 * fuzzutil.h: what the reader harnesses share: the in-memory file the
 * fuzzer's bytes go into (readers open files by path), the invariant check
 * and the walk over every cell of a table a reader returns. Define
 * FUZZ_NAME ("fuzz_csv", ...) before including it. Test code only.
 */
#ifndef ROWFIT_FUZZUTIL_H
#define ROWFIT_FUZZUTIL_H

#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/mman.h>
#include <unistd.h>

#include "../../io/table.h"

#ifndef FUZZ_NAME
#error "define FUZZ_NAME before including fuzzutil.h"
#endif

/* One in-memory file for the whole process, opened by path. */
static int fd = -1;
static char path[64];

static inline void check(int ok, const char *what)
{
    if (!ok) {
        fprintf(stderr, FUZZ_NAME ": invariant broken: %s\n", what);
        abort();
    }
}

/* Creates the in-memory file on the first call. */
static inline void fuzz_memfd(void)
{
    if (fd >= 0)
        return;
    fd = memfd_create(FUZZ_NAME, 0);
    if (fd < 0) {
        perror("memfd_create");
        abort();
    }
    snprintf(path, sizeof path, "/proc/self/fd/%d", fd);
}

/* The in-memory file now holds exactly data[0..size). */
static inline void fuzz_write(const uint8_t *data, size_t size)
{
    fuzz_memfd();
    if (ftruncate(fd, 0) != 0
        || (size > 0 && pwrite(fd, data, size, 0) != (ssize_t)size)) {
        perror(FUZZ_NAME ": memfd");
        abort();
    }
}

/* Every accessor on every cell of a table a reader returned. */
static inline void walk(const table *t)
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

#endif
