/*
 * ods.h: the OpenDocument spreadsheet (.ods) reader. Streams content.xml
 * through io/zipxml and hands one sheet's cells to a grid (io/grid.h), which
 * makes the table. Knows cells, their value types and repeats
 * (OpenDocument 1.2/1.3 part 1, table:table-cell); not the header rules
 * (grid), not format detection (reader), never models.
 */
#ifndef ROWFIT_ODS_H
#define ROWFIT_ODS_H

#include <stddef.h>
#include <stdint.h>

#include "error.h"
#include "grid.h"
#include "table.h"

/* Reads sheet `sheet` (a name or 1-based number; NULL = the first) of the
 * .ods at path into a new table (*out, caller frees; NULL on error). name
 * is how messages name the file. header is the 1-based header row, 0 for
 * the first non-blank row. Cells: float/percentage/currency -> number;
 * date -> date (1900-system serial plus the day fraction; the file stores
 * calendar dates, so table:null-date does not change them); time -> number
 * (fraction of a day); boolean -> yes-no; string or untyped -> text;
 * error results -> error cells. A formula cell gives its cached value.
 * Errors: RF_EINPUT for a file that is not a readable spreadsheet package,
 * malformed content, a cell with an unreadable value, cells past the format
 * limits, an unknown sheet (listing the sheets), and the grid's own errors;
 * RF_ESYSTEM when the file cannot be read; RF_ENOMEM. */
rf_status ods_read(const char *path, const char *name, const char *sheet,
                   uint32_t header, table **out, rf_warnings *warn,
                   rf_error *err);

/* The sheets of the .ods at path, in document order, with their used size
 * (last non-blank row, last non-blank column as a count), for `rowfit
 * peek`. *out (caller frees with grid_sheets_free) and *n; on error *out is
 * NULL and *n 0. Errors as ods_read. */
rf_status ods_sheets(const char *path, const char *name, grid_sheet **out,
                     size_t *n, rf_error *err);

#endif
