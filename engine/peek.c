/*
 * peek.c: `rowfit peek` (see peek.h).
 */
#include "peek.h"

#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "../io/reader.h"

#define PEEK_VALUES 4      /* first values shown per column */
#define PEEK_VALUE_CHARS 18 /* each cut to this many bytes (UTF-8 safe) */

typedef struct text {
    char *s;
    size_t n, cap;
    int failed;
} text;

static void add(text *t, const char *fmt, ...)
    __attribute__((format(printf, 2, 3)));

static void add(text *t, const char *fmt, ...)
{
    if (t->failed)
        return;
    for (;;) {
        va_list ap;
        va_start(ap, fmt);
        int k = vsnprintf(t->s ? t->s + t->n : NULL, t->cap - t->n, fmt, ap);
        va_end(ap);
        if (k < 0) {
            t->failed = 1;
            return;
        }
        if ((size_t)k < t->cap - t->n) {
            t->n += (size_t)k;
            return;
        }
        size_t cap = t->cap ? 2 * t->cap : 1024;
        while (cap - t->n <= (size_t)k)
            cap *= 2;
        char *s = realloc(t->s, cap);
        if (s == NULL) {
            t->failed = 1;
            return;
        }
        t->s = s;
        t->cap = cap;
    }
}

/* Display width of UTF-8 text: one column per character (common practice
 * for a plain terminal table; wide characters are not measured). */
static size_t width(const char *s)
{
    size_t w = 0;
    for (; *s; s++)
        w += ((unsigned char)*s & 0xC0) != 0x80;
    return w;
}

/* Pads s to w display columns. */
static void add_padded(text *t, const char *s, size_t w)
{
    add(t, "%s", s);
    for (size_t k = width(s); k < w; k++)
        add(t, " ");
}

/* File text reaches the terminal: control characters (a line break in a
 * header, an escape sequence) become '?', so they can neither break the
 * layout nor drive the terminal. */
static void tame(char *s)
{
    for (unsigned char *p = (unsigned char *)s; *p; p++)
        if (*p < 0x20 || *p == 0x7F)
            *p = '?';
}

/* s cut to at most n bytes on a character boundary, with "..." if cut. */
static void cut(const char *s, char *buf, size_t n)
{
    size_t len = strlen(s);
    if (len < n) {
        memcpy(buf, s, len + 1);
    } else {
        size_t k = n - 4;
        while (k > 0 && ((unsigned char)s[k] & 0xC0) == 0x80)
            k--;
        memcpy(buf, s, k);
        memcpy(buf + k, "...", 4);
    }
    tame(buf);
}

static void columns(text *out, const table *t, const char *title)
{
    size_t nc = table_cols(t), nr = table_rows(t);
    add(out, "%s: %zu row%s, %zu column%s\n", title, nr, nr == 1 ? "" : "s",
        nc, nc == 1 ? "" : "s");
    size_t wname = strlen("column");
    for (size_t c = 0; c < nc; c++)
        if (width(table_column_name(t, c)) > wname)
            wname = width(table_column_name(t, c));
    add(out, "  ");
    add_padded(out, "column", wname + 2);
    add(out, "%-8s %7s  %s\n", "kind", "blanks", "first values");
    size_t unnamed = 0;
    for (size_t c = 0; c < nc; c++) {
        char name[256];
        cut(table_column_name(t, c), name, sizeof name);
        unnamed += strncmp(name, "column ", 7) == 0;
        add(out, "  ");
        add_padded(out, name, wname + 2);
        add(out, "%-8s %7zu  ", table_kind_name(table_column_kind(t, c)),
            table_column_blanks(t, c));
        size_t shown = 0;
        for (size_t r = 0; r < nr && shown < PEEK_VALUES; r++) {
            if (table_cell_type(t, r, c) == CELL_BLANK)
                continue;
            char v[256], cv[PEEK_VALUE_CHARS + 4];
            table_cell_show(t, r, c, v, sizeof v);
            cut(v, cv, sizeof cv);
            add(out, "%s%s", shown ? " | " : "", cv);
            shown++;
        }
        add(out, "\n");
    }
    if (unnamed > 0 && unnamed + 1 >= nc)
        add(out, "Most columns have no name in the header row. If the names "
                 "are on a later row (a title above the table?), give that "
                 "row in the job: data FILE header N.\n");
}

rf_status peek_text(const char *path, const char *name, const char *sheet,
                    char **out, rf_warnings *warn, rf_error *err)
{
    *out = NULL;
    text t = { NULL, 0, 0, 0 };
    reader_format fmt;
    grid_sheet *sheets = NULL;
    size_t n = 0;
    rf_status st;
    if (sheet == NULL) {
        if ((st = reader_sheets(path, name, &fmt, &sheets, &n, warn, err)))
            return st;
        if (fmt != FORMAT_CSV) {
            add(&t, "%s: %s with %zu sheet%s\n", name, reader_format_name(fmt),
                n, n == 1 ? "" : "s");
            size_t w = strlen("sheet");
            for (size_t i = 0; i < n; i++)
                if (width(sheets[i].name) > w)
                    w = width(sheets[i].name);
            add(&t, "  %3s  ", "#");
            add_padded(&t, "sheet", w + 2);
            add(&t, "%8s %8s\n", "rows", "columns");
            for (size_t i = 0; i < n; i++) {
                char sn[256];
                cut(sheets[i].name, sn, sizeof sn);
                add(&t, "  %3zu  ", i + 1);
                add_padded(&t, sn, w + 2);
                add(&t, "%8lu %8lu\n", (unsigned long)sheets[i].rows,
                    (unsigned long)sheets[i].cols);
            }
            add(&t, "'rowfit peek %s SHEET' shows a sheet's columns.\n", name);
            grid_sheets_free(sheets, n);
            goto done;
        }
    }
    reader_options o = { sheet, 0, 0 };
    table *tb = NULL;
    if ((st = reader_read(path, name, &o, &tb, warn, err)))
        return st;
    char title[600];
    if (table_sheet(tb))
        snprintf(title, sizeof title, "%.280s[%.280s]", name, table_sheet(tb));
    else
        snprintf(title, sizeof title, "%.500s", name);
    tame(title);
    columns(&t, tb, title);
    table_free(tb);
done:
    if (t.failed) {
        free(t.s);
        return error_nomem(err, name);
    }
    *out = t.s;
    return RF_OK;
}
