/*
 * ods.c: the OpenDocument spreadsheet reader (see ods.h). One pass of expat
 * over content.xml (io/zipxml) with a small state machine: sheet, row, cell,
 * paragraph. A row's cells are gathered first, because a row may be
 * repeated; repeats of blank rows and cells only move the counters, so the
 * million empty rows LibreOffice writes at the end of a sheet cost nothing.
 * Not the header rules (io/grid.c) and not format detection (io/reader.c).
 * A formula cell gives its saved result; one with none (table:formula, no
 * office:value-type, nothing shown: a file from a program that does not
 * calculate) is an error cell with ODS_FORMULA_UNSAVED as the reason,
 * never silently blank.
 *
 * Reference: OpenDocument 1.2 part 1 (OASIS), 9.1.4 table:table-cell,
 * 9.1.3 table:table-row, 19.385-19.389 office:value-type and its values,
 * 6.1.2-6.1.5 white space, text:s, text:tab, text:line-break.
 */
#include "ods.h"

#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "csv.h"
#include "zipxml.h"

/* Text of one cell: spreadsheet programs stop at 32,767 characters (the
 * ECMA-376 and LibreOffice cell limit), so 1 MiB is only reached by a
 * crafted file, e.g. text:s with text:c="2000000000". */
#define ODS_TEXT_MAX ((size_t)1 << 20)

/* Non-blank cells made by number-columns-repeated and number-rows-repeated
 * beyond the first copy. A 60-byte cell repeated 16,384 times in a row
 * repeated a million times would be 16 billion cells from a few bytes; real
 * files repeat non-blank cells only over runs of equal neighbours. */
#define ODS_REPEAT_CELLS_MAX ((uint64_t)1 << 24)

/* Sheets in one file: LibreOffice allows 10,000; past that it is not a
 * workbook anyone made by hand. */
#define ODS_SHEETS_MAX 10000u

#define NS_TABLE "urn:oasis:names:tc:opendocument:xmlns:table:1.0|"
#define NS_OFFICE "urn:oasis:names:tc:opendocument:xmlns:office:1.0|"
#define NS_TEXT "urn:oasis:names:tc:opendocument:xmlns:text:1.0|"
#define NS_DRAW "urn:oasis:names:tc:opendocument:xmlns:drawing:1.0|"
#define NS_CALCEXT \
    "urn:org:documentfoundation:names:experimental:calc:xmlns:calcext:1.0|"

#define CONTENT "content.xml"

/* The reason given for a formula cell with no saved result (table:formula
 * but no office:value-type and nothing shown): the file was written by a
 * program that does not calculate. The same family as io/xls.c's
 * XLS_FORMULA_UNREADABLE and io/xlsx.c's XLSX_FORMULA_UNSAVED. */
#define ODS_FORMULA_UNSAVED \
    "#FORMULA: this formula has no saved result (the file was written by " \
    "a program that does not calculate); open it in a spreadsheet program " \
    "and save it"

typedef enum vtype { V_NONE, V_FLOAT, V_DATE, V_TIME, V_BOOL, V_STRING,
                     V_OTHER } vtype;

/* A non-blank cell of the current row; text cells point into rtxt. */
typedef struct pcell {
    uint32_t col;
    cell_type type;
    double v;
    size_t off, len;
} pcell;

typedef struct ods {
    zipxml *z;
    const char *file;        /* as messages name it */
    int measure;             /* 1: every sheet's used size; 0: read one */
    const char *want;        /* read: the name wanted exactly, or NULL */
    long want_index;         /* read: the 0-based index wanted, or -1 */
    uint32_t header;

    char **names;            /* sheets seen, in order */
    uint32_t *used_rows, *used_cols;
    size_t nnames, capnames;

    unsigned long depth;     /* element depth; the root is 1 */
    unsigned long book_depth;   /* office:spreadsheet, 0 outside */
    int seen_book;
    unsigned long skip_depth;   /* inside an ignored subtree, 0 outside */
    int stopped;             /* zipxml_fail or zipxml_stop was called */

    int in_sheet;
    unsigned long sheet_depth;
    grid *g;
    uint64_t row;            /* 1-based row the next table-row starts at */
    uint64_t repeats;        /* cells made by repeats so far */
    uint32_t sheet_rows, sheet_cols;

    int in_row;
    unsigned long row_depth;
    uint64_t rows_rep;
    uint64_t col;            /* 0-based column of the next cell */
    pcell *cells;
    size_t nc, capc;
    char *rtxt;
    size_t rlen, rcap;

    int in_cell;
    unsigned long cell_depth;
    uint64_t cols_rep;
    vtype vt;
    int error_cell, formula, has_sval, date_as_text;
    double v;
    char *txt;               /* the paragraphs' text */
    size_t tlen, tcap;
    char *sval;              /* office:string-value */
    size_t slen, scap;
    int para_depth, paras, after_space;
} ods;

/* ---- small helpers ---------------------------------------------------- */

/* The local part of name when it is in namespace ns ("URI|"), else NULL. */
static const char *in_ns(const char *name, const char *ns, size_t nslen)
{
    return strncmp(name, ns, nslen) == 0 ? name + nslen : NULL;
}
#define LOCAL(name, ns) in_ns((name), ns, sizeof ns - 1)

static const char *attr(const char **atts, const char *ns, size_t nslen,
                        const char *local)
{
    for (size_t i = 0; atts[i] != NULL; i += 2) {
        const char *l = in_ns(atts[i], ns, nslen);
        if (l != NULL && strcmp(l, local) == 0)
            return atts[i + 1];
    }
    return NULL;
}
#define ATTR(atts, ns, local) attr((atts), ns, sizeof ns - 1, (local))

/* A repeat count: a positive integer; anything else counts as 1 (the
 * attribute's default), and huge ones are clamped past the format limits. */
static uint64_t repeat_count(const char *s)
{
    if (s == NULL || *s < '0' || *s > '9')
        return 1;
    uint64_t n = 0;
    for (; *s >= '0' && *s <= '9'; s++)
        if (n < ((uint64_t)1 << 40))
            n = n * 10 + (uint64_t)(*s - '0');
    return n == 0 ? 1 : n;
}

static void place(const ods *o, uint64_t row, uint64_t col, char *buf,
                  size_t n)
{
    char letters[16];
    table_column_letters(col < GRID_COLS_MAX ? (uint32_t)col
                                             : GRID_COLS_MAX - 1,
                         letters, sizeof letters);
    const char *sheet = o->nnames ? o->names[o->nnames - 1] : "";
    snprintf(buf, n, "%s[%s]!%s%llu", o->file, sheet, letters,
             (unsigned long long)row);
}

static void sheet_place(const ods *o, char *buf, size_t n)
{
    snprintf(buf, n, "%s[%s]", o->file,
             o->nnames ? o->names[o->nnames - 1] : "");
}

/* Stops the parse with an error; every handler returns at once after. */
static void fail(ods *o, rf_status st, const char *where, const char *fmt,
                 ...) __attribute__((format(printf, 4, 5)));
static void fail(ods *o, rf_status st, const char *where, const char *fmt,
                 ...)
{
    char msg[ERROR_MESSAGE_MAX];
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(msg, sizeof msg, fmt, ap);
    va_end(ap);
    o->stopped = 1;
    zipxml_fail(o->z, st, where, "%s", msg);
}

static void fail_cell(ods *o, const char *fmt, const char *value)
{
    char where[ERROR_WHERE_MAX];
    place(o, o->row, o->col, where, sizeof where);
    fail(o, RF_EINPUT, where, fmt, value);
}

static void fail_nomem(ods *o)
{
    fail(o, RF_ENOMEM, o->file, "out of memory");
}

static void fail_with(ods *o, const rf_error *e)
{
    fail(o, e->status, e->where, "%s", e->message);
}

/* Appends n bytes to a growing buffer; 0 on no memory. */
static int grow(char **buf, size_t *len, size_t *cap, const char *s,
                size_t n)
{
    if (*cap - *len < n) {
        size_t c = *cap ? *cap : 256;
        while (c - *len < n)
            c *= 2;
        char *b = realloc(*buf, c);
        if (b == NULL)
            return 0;
        *buf = b;
        *cap = c;
    }
    memcpy(*buf + *len, s, n);
    *len += n;
    return 1;
}

/* Cell text, with the cap. */
static void put(ods *o, const char *s, size_t n)
{
    if (n > ODS_TEXT_MAX - o->tlen) {
        char where[ERROR_WHERE_MAX];
        place(o, o->row, o->col, where, sizeof where);
        fail(o, RF_EINPUT, where,
             "a cell with more than %zu bytes of text (a spreadsheet cell "
             "holds at most 32,767 characters)", ODS_TEXT_MAX);
        return;
    }
    if (!grow(&o->txt, &o->tlen, &o->tcap, s, n))
        fail_nomem(o);
}

static void put_repeated(ods *o, char c, uint64_t k)
{
    char block[64];
    memset(block, c, sizeof block);
    while (k > 0 && !o->stopped) {
        size_t n = k < sizeof block ? (size_t)k : sizeof block;
        put(o, block, n);
        k -= n;
    }
}

/* ---- values ----------------------------------------------------------- */

static int digits(const char **p, int n, int *out)
{
    int v = 0;
    for (int i = 0; i < n; i++) {
        char c = (*p)[i];
        if (c < '0' || c > '9')
            return 0;
        v = v * 10 + (c - '0');
    }
    *p += n;
    *out = v;
    return 1;
}

/* office:date-value, an xsd:date or xsd:dateTime: YYYY-MM-DD, optionally
 * THH:MM:SS with a fraction, optionally a zone (ignored: a cell shows the
 * wall-clock time it holds). Returns 1 with *serial, 0 when the value is
 * well formed but outside 1900-01-01..9999-12-31 (shown as text then),
 * -1 when it is malformed. */
static int parse_date(const char *s, double *serial)
{
    int y, m, d, h = 0, mi = 0, sec = 0;
    double frac = 0;
    const char *p = s;
    int bc = *p == '-';
    if (bc)
        p++;
    const char *y0 = p;
    while (*p >= '0' && *p <= '9')
        p++;
    if (p - y0 < 4 || p - y0 > 9)
        return -1;
    y = 0;
    for (const char *q = y0; q < p; q++)
        y = y * 10 + (*q - '0');
    if (*p++ != '-' || !digits(&p, 2, &m) || *p++ != '-' ||
        !digits(&p, 2, &d))
        return -1;
    if (*p == 'T') {
        p++;
        if (!digits(&p, 2, &h) || *p++ != ':' || !digits(&p, 2, &mi) ||
            *p++ != ':' || !digits(&p, 2, &sec))
            return -1;
        if (*p == '.' || *p == ',') {
            double scale = 0.1;
            p++;
            if (*p < '0' || *p > '9')
                return -1;
            for (; *p >= '0' && *p <= '9'; p++, scale /= 10)
                frac += (*p - '0') * scale;
        }
        if (h > 24 || mi > 59 || sec > 60 ||
            (h == 24 && (mi || sec || frac > 0)))
            return -1;
    }
    if (*p == 'Z') {
        p++;
    } else if (*p == '+' || *p == '-') {
        int zh, zm;
        p++;
        if (!digits(&p, 2, &zh) || *p++ != ':' || !digits(&p, 2, &zm))
            return -1;
    }
    if (*p != '\0' || m < 1 || m > 12 || d < 1 || d > 31)
        return -1;
    if (bc || y < 1900 || y > 9999)
        return 0;
    double day = table_date_serial(y, m, d);
    if (day < 0)
        return -1;  /* 2026-02-30 */
    if (day < 61 && m <= 2 && y == 1900 && d == 29)
        return -1;  /* no such day outside the phantom serial */
    *serial = day + (h * 3600.0 + mi * 60.0 + sec + frac) / 86400.0;
    return 1;
}

/* office:time-value, an xsd:duration like PT12H30M00S or P1DT2H: the
 * fraction of a day (more than 1 past 24 hours). Years and months have no
 * fixed length in days, so they are refused. 1 on success. */
static int parse_duration(const char *s, double *days)
{
    const char *p = s;
    int neg = *p == '-';
    if (neg)
        p++;
    if (*p++ != 'P')
        return 0;
    int in_time = 0, parts = 0;
    double total = 0;
    while (*p != '\0') {
        if (*p == 'T') {
            if (in_time)
                return 0;
            in_time = 1;
            p++;
            continue;
        }
        double v = 0, scale = 0;
        int nd = 0;
        for (; (*p >= '0' && *p <= '9') || *p == '.' || *p == ','; p++) {
            if (*p == '.' || *p == ',') {
                if (scale != 0)
                    return 0;
                scale = 0.1;
                continue;
            }
            if (nd++ > 15)
                return 0;
            if (scale != 0) {
                v += (*p - '0') * scale;
                scale /= 10;
            } else {
                v = v * 10 + (*p - '0');
            }
        }
        if (nd == 0)
            return 0;
        char u = *p++;
        if (!in_time && u == 'D')
            total += v;
        else if (in_time && u == 'H')
            total += v / 24;
        else if (in_time && u == 'M')
            total += v / 1440;
        else if (in_time && u == 'S')
            total += v / 86400;
        else
            return 0;   /* Y, M (months), W or junk */
        parts++;
    }
    if (parts == 0)
        return 0;
    *days = neg ? -total : total;
    return 1;
}

/* The error texts spreadsheet programs show (OpenDocument part 2, 4.10
 * Errors; LibreOffice's own "Err:NNN"), for files without calcext. */
static int looks_like_error(const char *s, size_t n)
{
    static const char *const known[] = {
        "#N/A", "#DIV/0!", "#VALUE!", "#REF!", "#NAME?", "#NUM!", "#NULL!",
    };
    for (size_t i = 0; i < sizeof known / sizeof known[0]; i++)
        if (n == strlen(known[i]) && memcmp(s, known[i], n) == 0)
            return 1;
    if (n > 4 && memcmp(s, "Err:", 4) == 0) {
        for (size_t i = 4; i < n; i++)
            if (s[i] < '0' || s[i] > '9')
                return 0;
        return 1;
    }
    return 0;
}

/* ---- sheets, rows, cells ---------------------------------------------- */

static void sheet_start(ods *o, const char **atts)
{
    if (o->nnames == ODS_SHEETS_MAX) {
        fail(o, RF_EINPUT, NULL, "more than %u sheets", ODS_SHEETS_MAX);
        return;
    }
    if (o->nnames == o->capnames) {
        size_t c = o->capnames ? 2 * o->capnames : 8;
        char **nn = realloc(o->names, c * sizeof *nn);
        if (nn == NULL) {
            fail_nomem(o);
            return;
        }
        o->names = nn;
        uint32_t *r = realloc(o->used_rows, c * sizeof *r);
        if (r == NULL) {
            fail_nomem(o);
            return;
        }
        o->used_rows = r;
        uint32_t *k = realloc(o->used_cols, c * sizeof *k);
        if (k == NULL) {
            fail_nomem(o);
            return;
        }
        o->used_cols = k;
        o->capnames = c;
    }
    const char *nm = ATTR(atts, NS_TABLE, "name");
    char fallback[32];
    if (nm == NULL) {   /* required by the schema; name it as shown */
        snprintf(fallback, sizeof fallback, "Sheet%zu", o->nnames + 1);
        nm = fallback;
    }
    char *copy = strdup(nm);
    if (copy == NULL) {
        fail_nomem(o);
        return;
    }
    size_t i = o->nnames++;
    o->names[i] = copy;
    o->used_rows[i] = o->used_cols[i] = 0;

    int active = o->measure ||
                 (o->want_index >= 0 ? (long)i == o->want_index
                                     : strcmp(copy, o->want) == 0);
    if (!active) {
        o->skip_depth = o->depth;
        return;
    }
    o->in_sheet = 1;
    o->sheet_depth = o->depth;
    o->row = 1;
    o->sheet_rows = o->sheet_cols = 0;
    if (!o->measure) {
        o->g = grid_create(o->file, copy, o->header);
        if (o->g == NULL)
            fail_nomem(o);
    }
}

static void sheet_end(ods *o)
{
    o->in_sheet = 0;
    o->used_rows[o->nnames - 1] = o->sheet_rows;
    o->used_cols[o->nnames - 1] = o->sheet_cols;
    if (!o->measure) {
        /* The wanted sheet is read: the rest of the file is not needed. */
        o->stopped = 1;
        zipxml_stop(o->z);
    }
}

static void row_start(ods *o, const char **atts)
{
    o->in_row = 1;
    o->row_depth = o->depth;
    o->rows_rep = repeat_count(ATTR(atts, NS_TABLE, "number-rows-repeated"));
    o->col = 0;
    o->nc = 0;
    o->rlen = 0;
}

static rf_status emit(ods *o, uint32_t row, const pcell *c, rf_error *e)
{
    switch (c->type) {
    case CELL_NUMBER:
        return grid_number(o->g, row, c->col, c->v, e);
    case CELL_DATE:
        return grid_date(o->g, row, c->col, c->v, e);
    case CELL_BOOL:
        return grid_bool(o->g, row, c->col, c->v != 0, e);
    case CELL_TEXT:
        return grid_text(o->g, row, c->col, o->rtxt + c->off, c->len, e);
    case CELL_ERROR:
        return grid_error(o->g, row, c->col, o->rtxt + c->off, c->len, e);
    case CELL_BLANK:
        break;
    }
    return RF_OK;
}

static void row_end(ods *o)
{
    o->in_row = 0;
    uint64_t n = o->rows_rep;
    if (o->nc == 0) {   /* blank: just move on, however many repeats */
        o->row += n;
        if (o->row > (uint64_t)GRID_ROWS_MAX + 1)
            o->row = (uint64_t)GRID_ROWS_MAX + 1;
        return;
    }
    uint64_t last = o->row + n - 1;
    if (last > GRID_ROWS_MAX) {
        char where[ERROR_WHERE_MAX];
        sheet_place(o, where, sizeof where);
        fail(o, RF_EINPUT, where,
             "cells in row %llu, past the last row a sheet can have (%u)",
             (unsigned long long)(o->row > GRID_ROWS_MAX ? o->row
                                                         : GRID_ROWS_MAX + 1),
             GRID_ROWS_MAX);
        return;
    }
    if (n > 1) {
        o->repeats += (n - 1) * o->nc;
        if (o->repeats > ODS_REPEAT_CELLS_MAX) {
            char where[ERROR_WHERE_MAX];
            place(o, o->row, o->cells[0].col, where, sizeof where);
            fail(o, RF_EINPUT, where,
                 "repeated cells would make more than %llu cells "
                 "(number-rows-repeated %llu)",
                 (unsigned long long)ODS_REPEAT_CELLS_MAX,
                 (unsigned long long)n);
            return;
        }
    }
    if (last > o->sheet_rows)
        o->sheet_rows = (uint32_t)last;
    if (o->cells[o->nc - 1].col + 1 > o->sheet_cols)
        o->sheet_cols = o->cells[o->nc - 1].col + 1;
    if (!o->measure) {
        rf_error e;
        for (uint64_t r = o->row; r <= last; r++)
            for (size_t i = 0; i < o->nc; i++)
                if (emit(o, (uint32_t)r, &o->cells[i], &e) != RF_OK) {
                    fail_with(o, &e);
                    return;
                }
    }
    o->row = last + 1;
}

static void cell_start(ods *o, const char **atts, int covered)
{
    o->cols_rep = repeat_count(ATTR(atts, NS_TABLE,
                                    "number-columns-repeated"));
    if (covered) {   /* the hidden part of a merge: blank by definition */
        o->col += o->cols_rep;
        if (o->col > GRID_COLS_MAX)
            o->col = GRID_COLS_MAX;
        o->skip_depth = o->depth;
        return;
    }
    o->in_cell = 1;
    o->cell_depth = o->depth;
    o->vt = V_NONE;
    o->error_cell = o->formula = o->has_sval = o->date_as_text = 0;
    o->tlen = o->slen = 0;
    o->para_depth = o->paras = 0;
    o->after_space = 0;

    const char *ce = ATTR(atts, NS_CALCEXT, "value-type");
    o->error_cell = ce != NULL && strcmp(ce, "error") == 0;
    o->formula = ATTR(atts, NS_TABLE, "formula") != NULL;
    const char *t = ATTR(atts, NS_OFFICE, "value-type");
    if (t == NULL || o->error_cell)
        return;
    if (!strcmp(t, "float") || !strcmp(t, "percentage") ||
        !strcmp(t, "currency")) {
        const char *s = ATTR(atts, NS_OFFICE, "value");
        o->vt = V_FLOAT;
        if (s == NULL || !csv_parse_number(s, strlen(s), &o->v))
            fail_cell(o, "a number cell whose office:value is not a "
                         "number: '%.60s'", s ? s : "(missing)");
    } else if (!strcmp(t, "date")) {
        const char *s = ATTR(atts, NS_OFFICE, "date-value");
        o->vt = V_DATE;
        int r = s ? parse_date(s, &o->v) : -1;
        if (r < 0)
            fail_cell(o, "a date cell whose office:date-value is not a "
                         "date: '%.60s'", s ? s : "(missing)");
        else if (r == 0)
            o->date_as_text = 1;
        if (r == 0 && !grow(&o->sval, &o->slen, &o->scap, s, strlen(s)))
            fail_nomem(o);
    } else if (!strcmp(t, "time")) {
        const char *s = ATTR(atts, NS_OFFICE, "time-value");
        o->vt = V_TIME;
        if (s == NULL || !parse_duration(s, &o->v))
            fail_cell(o, "a time cell whose office:time-value is not a "
                         "duration like PT12H30M00S: '%.60s'",
                      s ? s : "(missing)");
    } else if (!strcmp(t, "boolean")) {
        const char *s = ATTR(atts, NS_OFFICE, "boolean-value");
        o->vt = V_BOOL;
        if (s != NULL && (!strcmp(s, "true") || !strcmp(s, "1")))
            o->v = 1;
        else if (s != NULL && (!strcmp(s, "false") || !strcmp(s, "0")))
            o->v = 0;
        else
            fail_cell(o, "a yes-no cell whose office:boolean-value is "
                         "neither true nor false: '%.60s'",
                      s ? s : "(missing)");
    } else if (!strcmp(t, "string")) {
        const char *s = ATTR(atts, NS_OFFICE, "string-value");
        o->vt = V_STRING;
        if (s != NULL) {
            o->has_sval = 1;
            if (!grow(&o->sval, &o->slen, &o->scap, s, strlen(s)))
                fail_nomem(o);
        }
    } else {
        o->vt = V_OTHER;   /* a later version's type: keep what it shows */
    }
}

/* Adds the finished cell to the row, cols_rep times. */
static void cell_end(ods *o)
{
    o->in_cell = 0;
    cell_type type = CELL_BLANK;
    const char *s = o->txt;
    size_t len = o->tlen;
    if (o->error_cell || (o->formula && (o->vt == V_STRING ||
                                         o->vt == V_NONE) &&
                          looks_like_error(o->txt, o->tlen))) {
        type = CELL_ERROR;
        if (len == 0) {
            s = "#VALUE!";   /* an error cell that shows nothing */
            len = strlen(s);
        }
    } else if (o->formula && o->vt == V_NONE && len == 0 && !o->has_sval) {
        /* Never silently blank: a row of such cells would vanish. */
        type = CELL_ERROR;
        s = ODS_FORMULA_UNSAVED;
        len = strlen(s);
    } else if (o->vt == V_FLOAT || o->vt == V_TIME) {
        type = CELL_NUMBER;
    } else if (o->vt == V_DATE) {
        type = o->date_as_text ? CELL_TEXT : CELL_DATE;
        if (o->date_as_text && len == 0) {
            s = o->sval;
            len = o->slen;
        }
    } else if (o->vt == V_BOOL) {
        type = CELL_BOOL;
    } else {
        if (o->has_sval) {
            s = o->sval;
            len = o->slen;
        }
        if (len > 0)
            type = CELL_TEXT;
    }

    uint64_t k = o->cols_rep;
    if (type == CELL_BLANK) {
        o->col += k;
        if (o->col > GRID_COLS_MAX)
            o->col = GRID_COLS_MAX;
        return;
    }
    if (o->col + k > GRID_COLS_MAX) {
        char where[ERROR_WHERE_MAX];
        sheet_place(o, where, sizeof where);
        fail(o, RF_EINPUT, where,
             "a cell in row %llu past the last column a sheet can have "
             "(%u)", (unsigned long long)o->row, GRID_COLS_MAX);
        return;
    }
    if (k > 1) {
        o->repeats += k - 1;
        if (o->repeats > ODS_REPEAT_CELLS_MAX) {
            char where[ERROR_WHERE_MAX];
            place(o, o->row, o->col, where, sizeof where);
            fail(o, RF_EINPUT, where,
                 "repeated cells would make more than %llu cells "
                 "(number-columns-repeated %llu)",
                 (unsigned long long)ODS_REPEAT_CELLS_MAX,
                 (unsigned long long)k);
            return;
        }
    }
    size_t off = o->rlen;
    if ((type == CELL_TEXT || type == CELL_ERROR) &&
        !grow(&o->rtxt, &o->rlen, &o->rcap, s, len)) {
        fail_nomem(o);
        return;
    }
    if (o->capc - o->nc < k) {
        size_t c = o->capc ? o->capc : 16;
        while (c - o->nc < k)
            c *= 2;
        pcell *nc = realloc(o->cells, c * sizeof *nc);
        if (nc == NULL) {
            fail_nomem(o);
            return;
        }
        o->cells = nc;
        o->capc = c;
    }
    for (uint64_t i = 0; i < k; i++) {
        pcell *c = &o->cells[o->nc++];
        c->col = (uint32_t)(o->col + i);
        c->type = type;
        c->v = o->v;
        c->off = off;
        c->len = len;
    }
    o->col += k;
}

/* An element inside a cell: paragraphs and their spaces make the text;
 * annotations (comments), drawings and nested tables are not the value. */
static void cell_child_start(ods *o, const char *name, const char **atts)
{
    const char *l;
    if ((l = LOCAL(name, NS_TEXT)) != NULL) {
        if (!strcmp(l, "p") || !strcmp(l, "h")) {
            if (o->para_depth++ == 0) {
                if (o->paras++ > 0)
                    put(o, "\n", 1);
                o->after_space = 1;   /* leading white space is dropped */
            }
        } else if (o->para_depth == 0) {
            return;   /* text:list and the like: paragraphs come inside */
        } else if (!strcmp(l, "s")) {
            const char *c = ATTR(atts, NS_TEXT, "c");
            put_repeated(o, ' ', c ? repeat_count(c) : 1);
            o->after_space = 0;
        } else if (!strcmp(l, "tab")) {
            put(o, "\t", 1);
            o->after_space = 0;
        } else if (!strcmp(l, "line-break")) {
            put(o, "\n", 1);
            o->after_space = 0;
        } else if (!strcmp(l, "note") || !strcmp(l, "ruby-text")) {
            o->skip_depth = o->depth;
        }
    } else if ((l = LOCAL(name, NS_OFFICE)) != NULL) {
        if (!strcmp(l, "annotation"))
            o->skip_depth = o->depth;
    } else if (LOCAL(name, NS_DRAW) != NULL || LOCAL(name, NS_TABLE) != NULL) {
        o->skip_depth = o->depth;
    }
}

static void cell_child_end(ods *o, const char *name)
{
    const char *l = LOCAL(name, NS_TEXT);
    if (l != NULL && (!strcmp(l, "p") || !strcmp(l, "h")) &&
        o->para_depth > 0)
        o->para_depth--;
}

/* ---- expat handlers --------------------------------------------------- */

static void XMLCALL on_start(void *ud, const XML_Char *name,
                             const XML_Char **atts)
{
    ods *o = ud;
    o->depth++;
    if (o->stopped || o->skip_depth)
        return;
    if (o->in_cell) {
        cell_child_start(o, name, atts);
        return;
    }
    const char *l;
    if ((l = LOCAL(name, NS_TABLE)) != NULL) {
        if (o->in_row) {
            if (!strcmp(l, "table-cell"))
                cell_start(o, atts, 0);
            else if (!strcmp(l, "covered-table-cell"))
                cell_start(o, atts, 1);
            else
                o->skip_depth = o->depth;
        } else if (o->in_sheet) {
            if (!strcmp(l, "table-row"))
                row_start(o, atts);
            else if (!strcmp(l, "table"))   /* not a sheet: nested */
                o->skip_depth = o->depth;
            /* table-header-rows, table-row-group, ...: rows come inside */
        } else if (o->book_depth && o->depth == o->book_depth + 1 &&
                   !strcmp(l, "table")) {
            sheet_start(o, atts);
        }
    } else if ((l = LOCAL(name, NS_OFFICE)) != NULL) {
        if (!strcmp(l, "spreadsheet") && !o->book_depth) {
            o->book_depth = o->depth;
            o->seen_book = 1;
        } else if (o->in_sheet) {
            o->skip_depth = o->depth;   /* office:forms, annotations */
        }
    } else if (o->in_sheet) {
        o->skip_depth = o->depth;   /* shapes, calcext conditions, ... */
    }
}

static void XMLCALL on_end(void *ud, const XML_Char *name)
{
    ods *o = ud;
    unsigned long d = o->depth--;
    if (o->stopped)
        return;
    if (o->skip_depth) {
        if (d == o->skip_depth)
            o->skip_depth = 0;
        return;
    }
    if (o->in_cell) {
        if (d == o->cell_depth)
            cell_end(o);
        else
            cell_child_end(o, name);
    } else if (o->in_row && d == o->row_depth) {
        row_end(o);
    } else if (o->in_sheet && d == o->sheet_depth) {
        sheet_end(o);
    } else if (d == o->book_depth) {
        o->book_depth = 0;
    }
}

/* Character data of a paragraph, with white space collapsed (part 1,
 * 6.1.2: runs of space, tab, CR, LF are one space, and none at the start
 * of a paragraph; the spaces a file means come as text:s). */
static void XMLCALL on_text(void *ud, const XML_Char *s, int n)
{
    ods *o = ud;
    if (o->stopped || o->skip_depth || !o->in_cell || o->para_depth == 0)
        return;
    size_t i = 0, len = (size_t)n;
    while (i < len && !o->stopped) {
        size_t j = i;
        while (j < len && s[j] != ' ' && s[j] != '\t' && s[j] != '\n' &&
               s[j] != '\r')
            j++;
        if (j > i) {
            put(o, s + i, j - i);
            o->after_space = 0;
        }
        if (j < len) {
            if (!o->after_space)
                put(o, " ", 1);
            o->after_space = 1;
            j++;
        }
        i = j;
    }
}

/* ---- entry points ----------------------------------------------------- */

static void ods_clear(ods *o)
{
    grid_free(o->g);
    for (size_t i = 0; i < o->nnames; i++)
        free(o->names[i]);
    free(o->names);
    free(o->used_rows);
    free(o->used_cols);
    free(o->cells);
    free(o->rtxt);
    free(o->txt);
    free(o->sval);
}

/* One pass over content.xml. On RF_OK the sheets seen are in o->names. */
static rf_status pass(ods *o, rf_error *err)
{
    static const zipxml_handlers h = { on_start, on_end, on_text };
    rf_error e;
    memset(&e, 0, sizeof e);
    rf_status st = zipxml_parse(o->z, CONTENT, &h, o, &e);
    if (st != RF_OK) {
        *err = e;
        return st;
    }
    if (!o->seen_book) {
        char where[ERROR_WHERE_MAX];
        snprintf(where, sizeof where, "%s: part " CONTENT, o->file);
        return error_set(err, RF_EINPUT, where,
                         "not a spreadsheet (no office:spreadsheet; a text "
                         "document or a drawing?)");
    }
    return RF_OK;
}

static void reset_position(ods *o)
{
    for (size_t i = 0; i < o->nnames; i++)
        free(o->names[i]);
    o->nnames = 0;
    o->depth = o->book_depth = o->skip_depth = 0;
    o->seen_book = o->stopped = 0;
    o->in_sheet = o->in_row = o->in_cell = 0;
    o->repeats = 0;
}

rf_status ods_read(const char *path, const char *name, const char *sheet,
                   uint32_t header, table **out, rf_warnings *warn,
                   rf_error *err)
{
    *out = NULL;
    ods o;
    memset(&o, 0, sizeof o);
    o.file = name;
    o.want = sheet;
    o.want_index = sheet == NULL ? 0 : -1;
    o.header = header;
    rf_status st = zipxml_open(path, name, &o.z, err);
    if (st != RF_OK)
        return st;
    if ((st = pass(&o, err)) != RF_OK)
        goto done;
    if (o.g == NULL && sheet != NULL) {
        /* No sheet has exactly that name: the same choice as every other
         * reader (case, then number), then read that one. */
        size_t idx;
        st = grid_pick_sheet(name, sheet, (const char *const *)o.names,
                             o.nnames, &idx, err);
        if (st != RF_OK)
            goto done;
        reset_position(&o);
        o.want_index = (long)idx;
        if ((st = pass(&o, err)) != RF_OK)
            goto done;
    }
    if (o.g == NULL) {
        st = grid_pick_sheet(name, sheet, (const char *const *)o.names,
                             o.nnames, &(size_t){0}, err);
        if (st == RF_OK)   /* cannot happen: a picked sheet was read */
            st = error_set(err, RF_EINPUT, name, "the sheet was not found");
        goto done;
    }
    st = grid_finish(o.g, out, warn, err);
done:
    ods_clear(&o);
    zipxml_close(o.z);
    return st;
}

rf_status ods_sheets(const char *path, const char *name, grid_sheet **out,
                     size_t *n, rf_error *err)
{
    *out = NULL;
    *n = 0;
    ods o;
    memset(&o, 0, sizeof o);
    o.file = name;
    o.measure = 1;
    o.want_index = -1;
    rf_status st = zipxml_open(path, name, &o.z, err);
    if (st != RF_OK)
        return st;
    if ((st = pass(&o, err)) != RF_OK)
        goto done;
    if (o.nnames > 0) {
        grid_sheet *s = calloc(o.nnames, sizeof *s);
        if (s == NULL) {
            st = error_nomem(err, name);
            goto done;
        }
        for (size_t i = 0; i < o.nnames; i++) {
            s[i].name = o.names[i];   /* moves to the caller */
            o.names[i] = NULL;
            s[i].rows = o.used_rows[i];
            s[i].cols = o.used_cols[i];
        }
        *out = s;
        *n = o.nnames;
    }
done:
    ods_clear(&o);
    zipxml_close(o.z);
    return st;
}
