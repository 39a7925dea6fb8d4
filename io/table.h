/*
 * table.h: the one table type that every reader (csv, xlsx, xls, ods)
 * produces and the engine consumes. Columnar: each column has a header name,
 * a kind summarising its cells, and per row a cell that is blank, a number, a
 * date, a yes-no value, text, or a spreadsheet error. Every cell keeps its
 * source position so messages can name "sales.csv:1042" or
 * "sales.xlsx[Closed sales]!D17". Not a reader and not a model: it knows
 * neither file formats nor statistics.
 *
 * Column names are stored and compared exactly (case and inner spaces
 * count) after trimming leading and trailing ASCII spaces and tabs, so
 * " price" and "price" are the same column but "Price" is another: a header
 * cell's stray spaces are invisible in a spreadsheet, its case is not.
 */
#ifndef ROWFIT_TABLE_H
#define ROWFIT_TABLE_H

#include <stddef.h>
#include <stdint.h>

#include "error.h"

typedef enum cell_type {
    CELL_BLANK = 0,
    CELL_NUMBER,  /* value: the number */
    CELL_DATE,    /* value: serial day number, 1900 system (1 = 1900-01-01) */
    CELL_BOOL,    /* value: 0 or 1 */
    CELL_TEXT,    /* text: the cell's text, UTF-8 */
    CELL_ERROR    /* text: the error as shown, e.g. "#N/A" */
} cell_type;

typedef enum column_kind {
    KIND_BLANK = 0,  /* no non-blank cell */
    KIND_NUMBER,     /* every non-blank cell is a number */
    KIND_DATE,       /* every non-blank cell is a date */
    KIND_YESNO,      /* every non-blank cell is a yes-no value, or text among
                        yes/no/true/false (any case) */
    KIND_TEXT,       /* every non-blank cell is text */
    KIND_MIXED       /* anything else (errors make a column mixed) */
} column_kind;

typedef struct table table;

/* Creates an empty table read from file (as the user named it, for
 * messages) and, for spreadsheets, sheet (NULL for CSV). NULL on no memory. */
table *table_create(const char *file, const char *sheet);
void table_free(table *t);  /* accepts NULL */

/* Adds a column named name, found in the source's column src_col (0-based:
 * 0 = column A), with header cell at source row src_row. Duplicate names are
 * an RF_EINPUT error naming both header cells. A column added after rows
 * (a reader meeting a cell right of the header) is blank in those rows. */
rf_status table_add_column(table *t, const char *name, uint32_t src_col,
                           uint32_t src_row, rf_error *err);

/* Appends a row whose cells are all blank; src_row is the line number (CSV)
 * or the 1-based row number the spreadsheet shows. */
rf_status table_append_row(table *t, uint32_t src_row, rf_error *err);

/* Set a cell of the last appended row. len is the byte length of s. */
rf_status table_set_number(table *t, size_t col, double v, rf_error *err);
rf_status table_set_date(table *t, size_t col, double serial, rf_error *err);
rf_status table_set_bool(table *t, size_t col, int b, rf_error *err);
rf_status table_set_text(table *t, size_t col, const char *s, size_t len,
                         rf_error *err);
rf_status table_set_error(table *t, size_t col, const char *s, size_t len,
                          rf_error *err);

/* A cell for table_append_cells: its type, and the value (NUMBER, DATE,
 * BOOL) or the text's len bytes (TEXT, ERROR; copied). */
typedef struct table_cell_in {
    cell_type type;
    double num;
    const char *text;
    size_t len;
} table_cell_in;

/* Appends a row and sets its first n cells (n <= table_cols; the rest are
 * blank) in one call: the same as table_append_row and a table_set_* per
 * cell, for a reader that has a whole row. On error the row may be partly
 * set, as with table_set_*. */
rf_status table_append_cells(table *t, uint32_t src_row,
                             const table_cell_in *cells, size_t n,
                             rf_error *err);

/* Drops trailing rows whose cells are all blank; call when reading ends. */
void table_trim(table *t);

/* Shape and names. */
size_t table_rows(const table *t);
size_t table_cols(const table *t);
const char *table_file(const table *t);
const char *table_sheet(const table *t);           /* NULL for CSV */
const char *table_column_name(const table *t, size_t col);
long table_find_column(const table *t, const char *name); /* -1 if none */
column_kind table_column_kind(const table *t, size_t col);
size_t table_column_blanks(const table *t, size_t col);
const char *table_kind_name(column_kind k);  /* "number", "yes-no", ... */

/* Cells. number() is meaningful for NUMBER, DATE and BOOL cells; text() for
 * TEXT and ERROR cells (NULL otherwise). Pointers stay valid until free. */
cell_type table_cell_type(const table *t, size_t row, size_t col);
double table_cell_number(const table *t, size_t row, size_t col);
const char *table_cell_text(const table *t, size_t row, size_t col);

/* The source row number the user sees for a row (CSV line, sheet row). */
uint32_t table_row_source(const table *t, size_t row);

/* Writes the place of a cell into buf: "file:LINE" for CSV,
 * "file[sheet]!D17" for spreadsheets. col may be (size_t)-1 for the row
 * only ("file[sheet] row 17"). Returns buf. */
char *table_where(const table *t, size_t row, size_t col, char *buf,
                  size_t n);

/* Writes a cell's value as a user would read it, for messages ("'n/a'",
 * "12.5", "2026-03-15", "TRUE", "#N/A", "blank"). Returns buf. */
char *table_cell_show(const table *t, size_t row, size_t col, char *buf,
                      size_t n);

/* Text helpers shared by the readers. table_trim_span returns the span of
 * s[0..*len) without leading and trailing spaces and tabs (and sets *len);
 * table_word_is compares s[0..n) with a lowercase ASCII word ignoring case. */
static inline const char *table_trim_span(const char *s, size_t *len)
{
    /* inline: the readers run it for every cell */
    size_t n = *len;
    while (n > 0 && (*s == ' ' || *s == '\t')) {
        s++;
        n--;
    }
    while (n > 0 && (s[n - 1] == ' ' || s[n - 1] == '\t'))
        n--;
    *len = n;
    return s;
}
int table_word_is(const char *s, size_t n, const char *word);

/* Column letters for a 0-based column index: 0 -> "A", 27 -> "AB". */
char *table_column_letters(uint32_t col, char *buf, size_t n);

/* Dates, 1900 system as spreadsheets number them, including the phantom
 * 1900-02-29 (serial 60). table_date_serial returns -1 for an invalid date;
 * table_serial_date returns 0 and fills y/m/d, or -1 outside 1..2958465. */
double table_date_serial(int y, int m, int d);
int table_serial_date(double serial, int *y, int *m, int *d);

#endif
