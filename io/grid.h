/*
 * grid.h: what every spreadsheet reader (xlsx, ods, xls) shares. A reader
 * meets a sheet's cells row by row and hands each to a grid; the grid picks
 * the header row (the one the job names, or the first non-blank one), names
 * the columns (a blank header over data becomes "column G", with a
 * warning), skips blank rows, and builds the table. Also: choosing a sheet
 * by name or number, and the sheet list `rowfit peek` shows. Not a file
 * reader: it never sees bytes of a file.
 */
#ifndef ROWFIT_GRID_H
#define ROWFIT_GRID_H

#include <stddef.h>
#include <stdint.h>

#include "error.h"
#include "table.h"

/* The format limits (ECMA-376 and OpenDocument sheets as spreadsheet
 * programs open them): a cell beyond them is an error, not a silent cut. */
#define GRID_ROWS_MAX 1048576u
#define GRID_COLS_MAX 16384u

typedef struct grid grid;

/* A grid for sheet `sheet` of `file` (both as messages name them).
 * header_row is the 1-based header row, or 0 for the first non-blank row.
 * NULL on no memory. */
grid *grid_create(const char *file, const char *sheet, uint32_t header_row);
void grid_free(grid *g);  /* accepts NULL */

/* Cells, in row-major order: row is the 1-based row the sheet shows, col
 * the 0-based column (0 = A). Rows may be skipped (they are blank); within
 * a row, columns increase. A blank cell need not be given. Text that is
 * empty or only spaces and tabs is blank. Errors: RF_EINPUT for a cell beyond the format limits or out
 * of order; RF_ENOMEM. */
rf_status grid_number(grid *g, uint32_t row, uint32_t col, double v,
                      rf_error *err);
rf_status grid_date(grid *g, uint32_t row, uint32_t col, double serial,
                    rf_error *err);
rf_status grid_bool(grid *g, uint32_t row, uint32_t col, int b,
                    rf_error *err);
rf_status grid_text(grid *g, uint32_t row, uint32_t col, const char *s,
                    size_t len, rf_error *err);
rf_status grid_error(grid *g, uint32_t row, uint32_t col, const char *s,
                     size_t len, rf_error *err);

/* The last row and column that held a non-blank cell (0 and 0 when none
 * did): the sheet's used size, for `rowfit peek`. */
void grid_used(const grid *g, uint32_t *rows, uint32_t *cols);

/* Ends the sheet: the table (caller frees), trailing blank rows dropped.
 * Errors: no header row (an empty sheet, or a header row past the end),
 * duplicate column names (naming both cells). The grid is left empty;
 * free it after. */
rf_status grid_finish(grid *g, table **out, rf_warnings *warn,
                      rf_error *err);

/* A workbook's sheets, for `rowfit peek` and for messages. */
typedef struct grid_sheet {
    char *name;
    uint32_t rows, cols;   /* used size, 0 x 0 when not measured */
} grid_sheet;

void grid_sheets_free(grid_sheet *s, size_t n);  /* accepts NULL */

/* Chooses the sheet `want` among names[0..n): a sheet name (exact, then
 * ignoring ASCII case), or a 1-based number; NULL means the first sheet.
 * On no match: RF_EINPUT naming file and listing the sheets. */
rf_status grid_pick_sheet(const char *file, const char *want,
                          const char *const *names, size_t n, size_t *index,
                          rf_error *err);

#endif
