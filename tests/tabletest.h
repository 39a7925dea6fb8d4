/*
 * tabletest.h: a table (io/table.h) built cell by cell inside a test, for
 * the tests that feed the engine a table without reading a file. For tests
 * only; rowfit itself fills tables through its readers.
 */
#ifndef ROWFIT_TABLETEST_H
#define ROWFIT_TABLETEST_H

#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "../io/table.h"

/* A table named file with nc columns and nr rows of cell specs (row-major):
 * "" blank, "#..." a spreadsheet error, text that strtod reads whole a
 * number, anything else text. The header is line 1, row r is line r + 2,
 * as in a CSV file. */
static inline table *tt_make_table(const char *file,
                                   const char *const *names, size_t nc,
                                   const char *const *cells, size_t nr)
{
    rf_error e = {0};
    table *t = table_create(file, NULL);
    assert_non_null(t);
    for (size_t c = 0; c < nc; c++)
        assert_int_equal(table_add_column(t, names[c], (uint32_t)c, 1, &e),
                         RF_OK);
    for (size_t r = 0; r < nr; r++) {
        assert_int_equal(table_append_row(t, (uint32_t)(r + 2), &e), RF_OK);
        for (size_t c = 0; c < nc; c++) {
            const char *s = cells[r * nc + c];
            char *end;
            if (s[0] == '\0')
                continue;
            if (s[0] == '#') {
                assert_int_equal(table_set_error(t, c, s, strlen(s), &e), RF_OK);
                continue;
            }
            double v = strtod(s, &end);
            if (*end == '\0')
                assert_int_equal(table_set_number(t, c, v, &e), RF_OK);
            else
                assert_int_equal(table_set_text(t, c, s, strlen(s), &e), RF_OK);
        }
    }
    return t;
}

#endif
