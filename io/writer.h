/*
 * writer.h: the result workbook writer, a thin safe layer over libxlsxwriter.
 * It owns the file rules (write to a temporary file in the target folder,
 * then rename; never replace an input or a file rowfit did not write unless
 * forced), the cell rules (numbers as numbers at full precision, NaN/Inf
 * never written, input text always as text, never as a formula), and a
 * small fixed set of display formats. It does not know what the sheets mean:
 * engine/report.c lays them out. Rows of a sheet must be written in
 * increasing order (constant-memory mode, so a million rows stay cheap).
 */
#ifndef ROWFIT_WRITER_H
#define ROWFIT_WRITER_H

#include <stddef.h>
#include <stdint.h>
#include <time.h>

#include "error.h"

typedef enum writer_format {
    WFMT_NONE = 0,   /* general */
    WFMT_INTEGER,    /* 0 */
    WFMT_FIXED2,     /* #,##0.00 */
    WFMT_FIXED4,     /* 0.0000 */
    WFMT_SIG,        /* general number, up to the precision shown */
    WFMT_SCI,        /* 0.000E+00 */
    WFMT_PVALUE,     /* 0.0000 shown, full value stored */
    WFMT_PERCENT,    /* 0.0% */
    WFMT_DATE,       /* yyyy-mm-dd */
    WFMT_WRAP,       /* text wrapped at the column width */
    WFMT_BOLD,       /* bold text, for labels and headers */
    WFMT_COUNT_
} writer_format;

typedef struct writer writer;
typedef struct writer_sheet writer_sheet;

/* The checks writer_open makes before it creates anything: path is not an
 * input, not a folder, not a file rowfit did not write (unless force), and
 * its folder exists. For `rowfit check`, which writes nothing. */
rf_status writer_check(const char *path, int force,
                       const char *const *inputs, size_t n_inputs,
                       rf_error *err);

/* Starts a workbook that will become path. Refuses (RF_EINPUT) when path is
 * one of the n_inputs input files, or when path exists and was not written
 * by rowfit and force is 0. creator is recorded in the document properties
 * as the mark that rowfit wrote the file. *out is the new writer. */
rf_status writer_open(const char *path, int force,
                      const char *const *inputs, size_t n_inputs,
                      const char *creator, writer **out, rf_error *err);

/* Warnings (a text cut to fit a cell, bad UTF-8 replaced) go to warnings,
 * which the caller owns and must keep alive until commit or abort. Without
 * it they are dropped silently. */
void writer_set_warnings(writer *w, rf_warnings *warnings);

/* Fixes the document's creation time (default: the time of commit), so two
 * runs on the same input give byte-identical files. */
void writer_set_created(writer *w, time_t created);

/* Cell calls return only a status; the first failure is kept here with its
 * place ("results.xlsx[Estimates]!B7") and message. RF_OK when none. After
 * a failure every later cell call returns that status and writes nothing,
 * and writer_commit returns it. */
rf_status writer_status(const writer *w, rf_error *err);

/* Adds a sheet (names: at most 31 characters, none of []:*?/\, not empty,
 * not starting or ending with an apostrophe, not "History", unique ignoring
 * ASCII case). Returns NULL and fills err (RF_EINPUT) on a bad name, or on
 * no memory. Sheets appear in the order they are added. */
writer_sheet *writer_add_sheet(writer *w, const char *name, rf_error *err);

/* Column widths (in characters) and a default format, before any row. */
rf_status writer_column(writer_sheet *s, uint16_t col, double width,
                        writer_format fmt);

/* A bold header row at row 0, frozen, with an autofilter over columns
 * 0..n-1 and rows 0..last_row. Call before writing row 1. */
rf_status writer_header(writer_sheet *s, const char *const *names, size_t n,
                        uint32_t last_row);

/* Cells. A non-finite v is written as a blank and the call returns RF_OK
 * with *wrote_blank = 1 when that pointer is given (the caller says why in
 * the row's status). Text longer than a cell can hold (32,767 bytes) is cut
 * with a warning in the Job sheet. */
rf_status writer_number(writer_sheet *s, uint32_t row, uint16_t col,
                        double v, writer_format fmt, int *wrote_blank);
rf_status writer_text(writer_sheet *s, uint32_t row, uint16_t col,
                      const char *text, writer_format fmt);
rf_status writer_blank(writer_sheet *s, uint32_t row, uint16_t col,
                       writer_format fmt);
/* A live formula ("=B2*C2") with its cached value, so a reader that does
 * not recalculate still sees the number. A non-finite cached value writes
 * the formula with no cached number. */
rf_status writer_formula(writer_sheet *s, uint32_t row, uint16_t col,
                         const char *formula, double cached,
                         writer_format fmt);
/* The same with a text result ("=IF(B2>=0.5,\"yes\",\"no\")"), cached as
 * text; cached text is written as it is, never as a formula. */
rf_status writer_formula_text(writer_sheet *s, uint32_t row, uint16_t col,
                              const char *formula, const char *cached,
                              writer_format fmt);

/* A scatter chart with its top-left corner at (row, col) of s, plotting
 * the cells of y_range against those of x_range (ranges like
 * "=Estimates!$E$2:$E$101"), with a title and axis names. */
rf_status writer_scatter(writer_sheet *s, uint32_t row, uint16_t col,
                         const char *title, const char *x_name,
                         const char *x_range, const char *y_name,
                         const char *y_range);

/* Closes the workbook into a temporary file beside path and renames it over
 * path. On any failure the temporary file is removed and a previous file at
 * path is untouched. Frees w in every case. */
rf_status writer_commit(writer *w, rf_error *err);

/* Abandons the workbook: nothing is left on disk. Frees w (accepts NULL). */
void writer_abort(writer *w);

/* 1 when the file at path is an .xlsx whose document properties carry
 * rowfit's mark, 0 otherwise (including unreadable files). */
int writer_is_ours(const char *path);

/* A cell address "B2" for 0-based row and column. Returns buf. */
char *writer_cell_name(uint32_t row, uint16_t col, char *buf, size_t n);

#endif
