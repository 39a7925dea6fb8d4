/*
 * peek.h: `rowfit peek FILE [SHEET]`: what a file holds, as text for a
 * terminal: a workbook's sheets with their used sizes, or a sheet's (or a
 * CSV file's) columns with their kind, blank count and first values. Builds
 * the text; main() prints it.
 */
#ifndef ROWFIT_PEEK_H
#define ROWFIT_PEEK_H

#include "../io/error.h"

/* The text for path (name: as the user wrote it) and sheet (NULL: the
 * sheet list of a workbook, or the columns of CSV text). *out is malloc'd
 * (caller frees). */
rf_status peek_text(const char *path, const char *name, const char *sheet,
                    char **out, rf_warnings *warn, rf_error *err);

#endif
