/*
 * xls.h: the .xls reader (BIFF8, the 1997-2003 format, and BIFF5, in a compound
 * file), over FreeXL 1.0.6 for the cells it reads well, plus a small bounded
 * scan of the workbook stream for what FreeXL drops: formula results,
 * yes-no and error cells, and exact date serials. Hands cells to a grid;
 * knows nothing of headers or models. Also spots an encrypted .xlsx, which
 * is a compound file too.
 *
 * Limits: FreeXL holds a whole sheet in memory and refuses sheets over
 * 256 MB of cells; the format itself stops at 65,536 rows x 256 columns.
 */
#ifndef ROWFIT_XLS_H
#define ROWFIT_XLS_H

#include <stddef.h>
#include <stdint.h>

#include "error.h"
#include "grid.h"
#include "table.h"

/* The largest workbook stream the formula scan reads into memory: beyond
 * it the file is refused rather than read without its formula results. */
#define XLS_STREAM_MAX ((size_t)1 << 30)

/* Reads sheet `sheet` (a name or 1-based number; NULL = the first) of the
 * .xls file at path into a new table (*out, caller frees). name is how
 * messages name the file. header is the 1-based header row, 0 = the first
 * non-blank row. Formula cells give their saved result; a result that cannot
 * be read becomes an error cell whose text says why and what to do.
 * Errors: RF_EINPUT for a damaged, password-protected or empty workbook, a
 * sheet that does not exist (the message lists the sheets) and the grid's
 * header errors; RF_ESYSTEM when the file cannot be opened; RF_ENOMEM.
 * On error *out is NULL. */
rf_status xls_read(const char *path, const char *name, const char *sheet,
                   uint32_t header, table **out, rf_warnings *warn,
                   rf_error *err);

/* The workbook's sheets (*out, *n; free with grid_sheets_free) with the
 * used size each sheet records for itself (rows and columns counted from
 * A1, so a sheet whose data starts in C3 counts the empty first rows and
 * columns). Same errors as xls_read. */
rf_status xls_sheets(const char *path, const char *name, grid_sheet **out,
                     size_t *n, rf_error *err);

/* 1 if path is a compound file holding the streams of an encrypted Office
 * Open XML package ("EncryptionInfo" and "EncryptedPackage": a password-
 * protected .xlsx), else 0 (also when the file cannot be read). */
int xls_is_encrypted_ooxml(const char *path);

#endif
