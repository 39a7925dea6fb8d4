/*
 * reader.h: one entry for every input table. Decides the format from the
 * file's content, not its name (a zip holding xl/workbook.xml is .xlsx, one
 * holding an OpenDocument spreadsheet is .ods, a compound file is .xls (or
 * a password-protected .xlsx, which the .xls reader recognises and
 * refuses), anything else is CSV text), warns when the name
 * says otherwise, and hands the file to its reader. Knows formats, not
 * models.
 */
#ifndef ROWFIT_READER_H
#define ROWFIT_READER_H

#include <stddef.h>
#include <stdint.h>

#include "error.h"
#include "grid.h"
#include "table.h"

typedef enum reader_format {
    FORMAT_CSV = 0,
    FORMAT_XLSX,
    FORMAT_ODS,
    FORMAT_XLS
} reader_format;

typedef struct reader_options {
    const char *sheet;  /* a sheet name or 1-based number; NULL = first */
    uint32_t header;    /* 1-based header row; 0 = first non-blank row */
    char delimiter;     /* CSV only: ',' ';' '\t', 0 = detect */
} reader_options;

/* The format of the file at path, by content. RF_EINPUT for a zip that is
 * no workbook; RF_ESYSTEM when it cannot be read.
 * A name whose extension says another format gets a warning. */
rf_status reader_detect(const char *path, const char *name,
                        reader_format *fmt, rf_warnings *warn,
                        rf_error *err);

/* "CSV text", "an .xlsx workbook", ... for messages. */
const char *reader_format_name(reader_format f);

/* Reads the table (caller frees). A sheet given for CSV text, or a
 * delimiter for a workbook, is an RF_EINPUT error. */
rf_status reader_read(const char *path, const char *name,
                      const reader_options *opt, table **out,
                      rf_warnings *warn, rf_error *err);

/* The sheets of a workbook with their used sizes (caller frees with
 * grid_sheets_free); for CSV text, *n = 0 and *fmt = FORMAT_CSV. */
rf_status reader_sheets(const char *path, const char *name,
                        reader_format *fmt, grid_sheet **out, size_t *n,
                        rf_warnings *warn, rf_error *err);

#endif
