/*
 * xlsx.h: the .xlsx (ECMA-376 SpreadsheetML) reader. Finds a sheet by name
 * through the workbook and its relationships, streams the sheet's XML cell
 * by cell into a grid (io/grid.h), which builds the table. Cached values of
 * formula cells are read; formulas are never evaluated. Not a detector of
 * formats (io/reader.c decides a file is .xlsx) and not a writer.
 */
#ifndef ROWFIT_XLSX_H
#define ROWFIT_XLSX_H

#include <stddef.h>
#include <stdint.h>

#include "error.h"
#include "grid.h"
#include "table.h"

/* Reads sheet `sheet` (a name or a 1-based number as text; NULL = the
 * first sheet) of the workbook at path into *out (caller frees). name is
 * how messages name the file. header: the 1-based header row, 0 = the first
 * non-blank row. Errors: RF_EINPUT for a package that is not a workbook, a
 * missing or corrupt part, a safety limit (io/zipxml.c), no such sheet (the
 * message lists the sheets), a cell that cannot be read
 * ("sales.xlsx[Closed sales]!D17: ..."); RF_ESYSTEM when the file cannot
 * be read; RF_ENOMEM. On error *out is NULL. */
rf_status xlsx_read(const char *path, const char *name, const char *sheet,
                    uint32_t header, table **out, rf_warnings *warn,
                    rf_error *err);

/* The workbook's sheets in workbook order, with their used size (last
 * non-blank row and column): from the sheet's <dimension> when it has one,
 * else by streaming the sheet; 0 x 0 for a chart sheet. *out is freed with
 * grid_sheets_free(*out, *n). */
rf_status xlsx_sheets(const char *path, const char *name, grid_sheet **out,
                      size_t *n, rf_error *err);

#endif
