/*
 * grid.c: cells of a sheet -> table, with the header rules every
 * spreadsheet reader shares (see grid.h).
 *
 * The header row's cells are held until the row ends (cells arrive in row
 * order, so the next row's first cell ends it); then each named header cell
 * becomes a column. A data cell under a blank header cell makes its column
 * then, named "column G", with a warning: so a merged header cell, whose
 * covered cells are blank, counts once, and a blank column right of the
 * data costs nothing.
 */
#include "grid.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

typedef struct hcell {
    uint32_t col;
    char *name;
} hcell;

struct grid {
    char *file, *sheet;
    uint32_t want_header;   /* 1-based, 0 = first non-blank row */
    uint32_t header;        /* the header row once met, 0 before */
    int columns_made;       /* the header row has ended */
    hcell *h;               /* header cells while the header row is open */
    size_t nh, caph;
    uint32_t row, col;      /* the last cell given, for the order check */
    int any;                /* a cell was given */
    int row_open;           /* a table row exists for `row` */
    long *map;              /* sheet column -> table column, -1 none */
    size_t nmap;
    table *t;
    uint32_t used_rows, used_cols;
    rf_warnings warn;       /* moved to the caller's list at the end */
};

grid *grid_create(const char *file, const char *sheet, uint32_t header_row)
{
    grid *g = calloc(1, sizeof *g);
    if (g == NULL)
        return NULL;
    g->file = strdup(file);
    g->sheet = strdup(sheet ? sheet : "");
    g->t = table_create(file, sheet ? sheet : "");
    if (g->file == NULL || g->sheet == NULL || g->t == NULL) {
        grid_free(g);
        return NULL;
    }
    g->want_header = header_row;
    return g;
}

void grid_free(grid *g)
{
    if (g == NULL)
        return;
    for (size_t i = 0; i < g->nh; i++)
        free(g->h[i].name);
    free(g->h);
    free(g->map);
    table_free(g->t);
    error_warnings_clear(&g->warn);
    free(g->file);
    free(g->sheet);
    free(g);
}

/* "file[sheet]!D17" */
static void place(const grid *g, uint32_t row, uint32_t col, char *buf,
                  size_t n)
{
    char letters[16];
    table_column_letters(col, letters, sizeof letters);
    snprintf(buf, n, "%s[%s]!%s%lu", g->file, g->sheet, letters,
             (unsigned long)row);
}

static rf_status nomem(const grid *g, rf_error *err)
{
    char where[ERROR_WHERE_MAX];
    snprintf(where, sizeof where, "%s[%s]", g->file, g->sheet);
    return error_nomem(err, where);
}

/* The table column of sheet column col, or -1. */
static long mapped(const grid *g, uint32_t col)
{
    return col < g->nmap ? g->map[col] : -1;
}

static rf_status map_set(grid *g, uint32_t col, long tc, rf_error *err)
{
    if (col >= g->nmap) {
        size_t n = g->nmap ? g->nmap : 16;
        while (n <= col)
            n *= 2;
        long *m = realloc(g->map, n * sizeof *m);
        if (m == NULL)
            return nomem(g, err);
        for (size_t i = g->nmap; i < n; i++)
            m[i] = -1;
        g->map = m;
        g->nmap = n;
    }
    g->map[col] = tc;
    return RF_OK;
}

/* The header row has ended: its named cells become the columns. */
static rf_status make_columns(grid *g, rf_error *err)
{
    g->columns_made = 1;
    for (size_t i = 0; i < g->nh; i++) {
        rf_status st = table_add_column(g->t, g->h[i].name, g->h[i].col,
                                        g->header, err);
        if (st != RF_OK)
            return st;
        if ((st = map_set(g, g->h[i].col, (long)table_cols(g->t) - 1, err)))
            return st;
    }
    return RF_OK;
}

/* A data cell under a blank header cell: its column starts now. */
static rf_status late_column(grid *g, uint32_t col, rf_error *err)
{
    char letters[16], name[32], where[ERROR_WHERE_MAX];
    table_column_letters(col, letters, sizeof letters);
    snprintf(name, sizeof name, "column %s", letters);
    place(g, g->header, col, where, sizeof where);
    error_warn(&g->warn, where, "the header cell is blank; the column below "
               "it is named '%s'", name);
    rf_status st = table_add_column(g->t, name, col, g->header, err);
    if (st != RF_OK)
        return st;
    return map_set(g, col, (long)table_cols(g->t) - 1, err);
}

/* The header's text for a cell value. */
static int header_name(cell_type type, double v, const char *s, size_t len,
                       char **out)
{
    char buf[64];
    int y, m, d;
    switch (type) {
    case CELL_NUMBER:
        snprintf(buf, sizeof buf, "%.15g", v);
        break;
    case CELL_DATE:
        if (table_serial_date(v, &y, &m, &d) == 0)
            snprintf(buf, sizeof buf, "%04d-%02d-%02d", y, m, d);
        else
            snprintf(buf, sizeof buf, "%.15g", v);
        break;
    case CELL_BOOL:
        snprintf(buf, sizeof buf, "%s", v != 0 ? "TRUE" : "FALSE");
        break;
    default:
        *out = strndup(s, len);
        return *out != NULL;
    }
    *out = strdup(buf);
    return *out != NULL;
}

/* Every cell goes through here. */
static rf_status cell(grid *g, uint32_t row, uint32_t col, cell_type type,
                      double v, const char *s, size_t len, rf_error *err)
{
    char where[ERROR_WHERE_MAX];
    if (row < 1 || row > GRID_ROWS_MAX || col >= GRID_COLS_MAX) {
        snprintf(where, sizeof where, "%s[%s]", g->file, g->sheet);
        return error_set(err, RF_EINPUT, where,
                         "a cell at row %lu, column %lu is beyond what a "
                         "sheet can hold (%u rows, %u columns)",
                         (unsigned long)row, (unsigned long)col + 1,
                         GRID_ROWS_MAX, GRID_COLS_MAX);
    }
    if (g->any && (row < g->row || (row == g->row && col <= g->col))) {
        place(g, row, col, where, sizeof where);
        return error_set(err, RF_EINPUT, where,
                         "cells out of order in the file (after %s%lu); the "
                         "file may be damaged",
                         "row ", (unsigned long)g->row);
    }
    if (g->any && row != g->row)
        g->row_open = 0;
    g->any = 1;
    g->row = row;
    g->col = col;
    if (type == CELL_TEXT || type == CELL_ERROR) {
        size_t n = len;
        table_trim_span(s, &n);
        if (n == 0)
            return RF_OK;   /* empty or only spaces: blank, as in CSV */
    }
    if (row > g->used_rows)
        g->used_rows = row;
    if (col + 1 > g->used_cols)
        g->used_cols = col + 1;

    rf_status st;
    if (!g->columns_made) {
        if (g->want_header && row < g->want_header)
            return RF_OK;   /* above the header: titles, notes */
        if (g->header == 0)
            g->header = g->want_header ? g->want_header : row;
        if (row == g->header) {
            char *name = NULL;
            if (!header_name(type, v, s, len, &name))
                return nomem(g, err);
            size_t n = strlen(name);
            table_trim_span(name, &n);
            if (n == 0) {   /* a blank header cell */
                free(name);
                return RF_OK;
            }
            if (g->nh == g->caph) {
                size_t cap = g->caph ? 2 * g->caph : 16;
                hcell *h = realloc(g->h, cap * sizeof *h);
                if (h == NULL) {
                    free(name);
                    return nomem(g, err);
                }
                g->h = h;
                g->caph = cap;
            }
            g->h[g->nh].col = col;
            g->h[g->nh++].name = name;
            return RF_OK;
        }
        if (g->nh == 0) {   /* the named header row is blank */
            snprintf(where, sizeof where, "%s[%s]", g->file, g->sheet);
            return error_set(err, RF_EINPUT, where,
                             "no header on row %lu: the row is blank",
                             (unsigned long)g->header);
        }
        if ((st = make_columns(g, err)))
            return st;
    }

    if (!g->row_open) {
        if ((st = table_append_row(g->t, row, err)))
            return st;
        g->row_open = 1;
    }
    long tc = mapped(g, col);
    if (tc < 0) {
        if ((st = late_column(g, col, err)))
            return st;
        tc = mapped(g, col);
    }
    switch (type) {
    case CELL_NUMBER:
        return table_set_number(g->t, (size_t)tc, v, err);
    case CELL_DATE:
        return table_set_date(g->t, (size_t)tc, v, err);
    case CELL_BOOL:
        return table_set_bool(g->t, (size_t)tc, v != 0, err);
    case CELL_TEXT:
        return table_set_text(g->t, (size_t)tc, s, len, err);
    case CELL_ERROR:
        return table_set_error(g->t, (size_t)tc, s, len, err);
    case CELL_BLANK:
        break;
    }
    return RF_OK;
}

rf_status grid_number(grid *g, uint32_t row, uint32_t col, double v,
                      rf_error *err)
{
    return cell(g, row, col, CELL_NUMBER, v, NULL, 0, err);
}

rf_status grid_date(grid *g, uint32_t row, uint32_t col, double serial,
                    rf_error *err)
{
    return cell(g, row, col, CELL_DATE, serial, NULL, 0, err);
}

rf_status grid_bool(grid *g, uint32_t row, uint32_t col, int b,
                    rf_error *err)
{
    return cell(g, row, col, CELL_BOOL, b ? 1 : 0, NULL, 0, err);
}

rf_status grid_text(grid *g, uint32_t row, uint32_t col, const char *s,
                    size_t len, rf_error *err)
{
    return cell(g, row, col, CELL_TEXT, 0, s, len, err);
}

rf_status grid_error(grid *g, uint32_t row, uint32_t col, const char *s,
                     size_t len, rf_error *err)
{
    return cell(g, row, col, CELL_ERROR, 0, s, len, err);
}

void grid_used(const grid *g, uint32_t *rows, uint32_t *cols)
{
    *rows = g->used_rows;
    *cols = g->used_cols;
}

rf_status grid_finish(grid *g, table **out, rf_warnings *warn,
                      rf_error *err)
{
    *out = NULL;
    char where[ERROR_WHERE_MAX];
    snprintf(where, sizeof where, "%s[%s]", g->file, g->sheet);
    if (!g->columns_made) {
        if (g->nh == 0) {
            if (g->want_header)
                return error_set(err, RF_EINPUT, where,
                                 "no header on row %lu: the row is blank or "
                                 "past the end of the sheet (its last used "
                                 "row is %lu)",
                                 (unsigned long)g->want_header,
                                 (unsigned long)g->used_rows);
            return error_set(err, RF_EINPUT, where, "the sheet is empty");
        }
        rf_status st = make_columns(g, err);
        if (st != RF_OK)
            return st;
    }
    table_trim(g->t);
    error_warnings_move(warn, &g->warn);
    *out = g->t;
    g->t = NULL;
    return RF_OK;
}

void grid_sheets_free(grid_sheet *s, size_t n)
{
    if (s == NULL)
        return;
    for (size_t i = 0; i < n; i++)
        free(s[i].name);
    free(s);
}

static int same_nocase(const char *a, const char *b)
{
    for (; *a && *b; a++, b++) {
        int x = (*a >= 'A' && *a <= 'Z') ? *a - 'A' + 'a' : *a;
        int y = (*b >= 'A' && *b <= 'Z') ? *b - 'A' + 'a' : *b;
        if (x != y)
            return 0;
    }
    return *a == *b;
}

rf_status grid_pick_sheet(const char *file, const char *want,
                          const char *const *names, size_t n, size_t *index,
                          rf_error *err)
{
    if (n == 0)
        return error_set(err, RF_EINPUT, file, "the workbook has no sheets");
    if (want == NULL) {
        *index = 0;
        return RF_OK;
    }
    for (size_t i = 0; i < n; i++)
        if (strcmp(names[i], want) == 0) {
            *index = i;
            return RF_OK;
        }
    for (size_t i = 0; i < n; i++)
        if (same_nocase(names[i], want)) {
            *index = i;
            return RF_OK;
        }
    /* a 1-based number, when no sheet has that name */
    char *end;
    unsigned long k = strtoul(want, &end, 10);
    if (*want >= '0' && *want <= '9' && *end == '\0') {
        if (k >= 1 && k <= n) {
            *index = k - 1;
            return RF_OK;
        }
        return error_set(err, RF_EINPUT, file,
                         "has %zu sheet%s, so there is no sheet %lu", n,
                         n == 1 ? "" : "s", k);
    }
    char list[ERROR_MESSAGE_MAX / 2];
    size_t used = 0;
    list[0] = '\0';
    for (size_t i = 0; i < n && used + 8 < sizeof list; i++) {
        int k2 = snprintf(list + used, sizeof list - used, "%s'%s'",
                          i ? ", " : "", names[i]);
        if (k2 < 0 || (size_t)k2 >= sizeof list - used) {
            snprintf(list + used, sizeof list - used, ", ...");
            break;
        }
        used += (size_t)k2;
    }
    return error_set(err, RF_EINPUT, file,
                     "has no sheet '%s'; its sheets are: %s", want, list);
}
