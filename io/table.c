/*
 * table.c: the columnar table every reader fills and the engine reads (see
 * table.h). Sized for a million rows of ten columns: a cell costs one type
 * byte plus one 8-byte value, text lives in a per-table arena of blocks that
 * never move. Knows no file format and no statistics.
 */
#include "table.h"

#include <assert.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* A cell's value: the number for NUMBER/DATE/BOOL, the arena text for
 * TEXT/ERROR. A pointer rather than an arena offset because arena blocks
 * never move, so the pointer can be handed out as is. */
typedef union cell_value {
    double num;
    const char *text;
} cell_value;

_Static_assert(sizeof(cell_value) <= 8, "a cell value fits in 8 bytes");

#define CELL_TYPES 6            /* CELL_BLANK .. CELL_ERROR */
#define ROWS_FIRST 256          /* first row capacity; then doubled */
#define ARENA_BLOCK (64 * 1024) /* text arena block; longer texts get their
                                   own block */
#define STAGE_ROWS 64           /* rows gathered row by row before they are
                                   written into the columns */

typedef struct column {
    char *name;           /* trimmed, owned */
    uint32_t src_col, src_row;
    uint8_t *type;        /* cell_type per row */
    cell_value *val;      /* value per row */
    size_t count[CELL_TYPES]; /* cells of each type; [CELL_BLANK] unused */
    size_t yesno_text;    /* TEXT cells reading yes/no/true/false */
} column;

typedef struct arena_block {
    struct arena_block *next;
    size_t used, cap;
    char data[];
} arena_block;

struct table {
    char *file;
    char *sheet;          /* NULL for CSV */
    column *cols;
    size_t ncols, capcols;
    uint32_t *src;        /* source row per row */
    size_t nrows, caprows;
    arena_block *arena;   /* newest block first */
    /* The last nstaged rows are still in the stage, STAGE_ROWS cells per
     * column for stage_cols columns, and are copied into the columns a
     * column at a time every STAGE_ROWS rows: writing twenty arrays at
     * once, row by row, is what made reading slow (the memory system
     * follows a few streams of writes, not twenty). The setters write the
     * last row there; adding a column or trimming flushes the stage first;
     * the getters look there for the last rows. */
    uint8_t *stage_type;
    cell_value *stage_val;
    size_t stage_cols, nstaged;
};

static char *dup_string(const char *s)
{
    size_t n = strlen(s) + 1;
    char *p = malloc(n);
    if (p != NULL)
        memcpy(p, s, n);
    return p;
}

static int is_space(char c)
{
    return c == ' ' || c == '\t';
}


static int ascii_lower(int c)
{
    return (c >= 'A' && c <= 'Z') ? c - 'A' + 'a' : c;
}

/* ASCII-only, so the locale cannot change which words count. */
int table_word_is(const char *s, size_t n, const char *word)
{
    size_t i;
    for (i = 0; i < n && word[i] != '\0'; i++)
        if (ascii_lower((unsigned char)s[i]) != word[i])
            return 0;
    return i == n && word[i] == '\0';
}

static int is_yesno_text(const char *s)
{
    /* Most text is none of the four words, and its first letter says so:
     * this runs for every text cell a reader stores. */
    while (is_space(*s))
        s++;
    switch (*s) {
    case 'y': case 'Y': case 'n': case 'N':
    case 't': case 'T': case 'f': case 'F':
        break;
    default:
        return 0;
    }
    size_t n = strlen(s);
    s = table_trim_span(s, &n);
    return table_word_is(s, n, "yes") || table_word_is(s, n, "no") ||
           table_word_is(s, n, "true") || table_word_is(s, n, "false");
}

table *table_create(const char *file, const char *sheet)
{
    table *t = calloc(1, sizeof *t);
    if (t == NULL)
        return NULL;
    t->file = dup_string(file ? file : "");
    if (t->file == NULL)
        goto fail;
    if (sheet != NULL) {
        t->sheet = dup_string(sheet);
        if (t->sheet == NULL)
            goto fail;
    }
    return t;
fail:
    table_free(t);
    return NULL;
}

void table_free(table *t)
{
    if (t == NULL)
        return;
    for (size_t c = 0; c < t->ncols; c++) {
        free(t->cols[c].name);
        free(t->cols[c].type);
        free(t->cols[c].val);
    }
    free(t->cols);
    free(t->src);
    free(t->stage_type);
    free(t->stage_val);
    arena_block *b = t->arena;
    while (b != NULL) {
        arena_block *next = b->next;
        free(b);
        b = next;
    }
    free(t->file);
    free(t->sheet);
    free(t);
}

/* Copies s[0..len) plus a NUL into the arena; NULL on no memory. */
static const char *arena_copy(table *t, const char *s, size_t len)
{
    if (len > SIZE_MAX - 1 - sizeof(arena_block))
        return NULL;
    size_t need = len + 1;
    arena_block *b = t->arena;
    if (b == NULL || b->cap - b->used < need) {
        size_t cap = need > ARENA_BLOCK ? need : ARENA_BLOCK;
        arena_block *nb = malloc(sizeof *nb + cap);
        if (nb == NULL)
            return NULL;
        nb->used = 0;
        nb->cap = cap;
        if (need > ARENA_BLOCK && b != NULL) {
            /* A long text fills its own block; keep the current block
             * first so its free room is still used. */
            nb->next = b->next;
            b->next = nb;
        } else {
            nb->next = b;
            t->arena = nb;
        }
        b = nb;
    }
    char *p = b->data + b->used;
    memcpy(p, s, len);
    p[len] = '\0';
    b->used += need;
    return p;
}

/* Copies the staged rows into the columns (see struct table). */
static void flush_stage(table *t)
{
    if (t->nstaged == 0)
        return;
    size_t first = t->nrows - t->nstaged, nc = t->stage_cols;
    assert(nc == t->ncols);
    for (size_t c = 0; c < nc; c++) {
        memcpy(t->cols[c].type + first, t->stage_type + c * STAGE_ROWS,
               t->nstaged * sizeof *t->stage_type);
        memcpy(t->cols[c].val + first, t->stage_val + c * STAGE_ROWS,
               t->nstaged * sizeof *t->stage_val);
    }
    t->nstaged = 0;
}

/* A cell's type and value wherever it is, in the columns or the stage. */
static inline cell_type cell_at(const table *t, size_t row, size_t col,
                                cell_value *v)
{
    size_t first = t->nrows - t->nstaged;
    if (row >= first) {
        size_t i = col * STAGE_ROWS + (row - first);
        *v = t->stage_val[i];
        return (cell_type)t->stage_type[i];
    }
    *v = t->cols[col].val[row];
    return (cell_type)t->cols[col].type[row];
}

/* The place of a column's header cell, for messages. */
static void header_where(const table *t, uint32_t src_col, uint32_t src_row,
                         char *buf, size_t n)
{
    if (t->sheet == NULL) {
        snprintf(buf, n, "%s:%lu", t->file, (unsigned long)src_row);
    } else {
        char letters[16];
        table_column_letters(src_col, letters, sizeof letters);
        snprintf(buf, n, "%s[%s]!%s%lu", t->file, t->sheet, letters,
                 (unsigned long)src_row);
    }
}

rf_status table_add_column(table *t, const char *name, uint32_t src_col,
                           uint32_t src_row, rf_error *err)
{
    char where[ERROR_WHERE_MAX];
    header_where(t, src_col, src_row, where, sizeof where);
    flush_stage(t);

    size_t len = strlen(name);
    const char *s = table_trim_span(name, &len);
    for (size_t c = 0; c < t->ncols; c++) {
        const column *o = &t->cols[c];
        if (strlen(o->name) == len && memcmp(o->name, s, len) == 0) {
            char letters[16];
            table_column_letters(o->src_col, letters, sizeof letters);
            if (t->sheet == NULL) {
                char mine[16];
                table_column_letters(src_col, mine, sizeof mine);
                return error_set(err, RF_EINPUT, where,
                                 "duplicate column name '%s' in column %s "
                                 "(also in column %s); column names must "
                                 "differ", o->name, mine, letters);
            }
            return error_set(err, RF_EINPUT, where,
                             "duplicate column name '%s' (also in %s%lu); "
                             "column names must differ", o->name, letters,
                             (unsigned long)o->src_row);
        }
    }

    if (t->ncols == t->capcols) {
        size_t cap = t->capcols ? 2 * t->capcols : 16;
        if (cap < t->capcols || cap > SIZE_MAX / sizeof(column))
            return error_nomem(err, where);
        column *cols = realloc(t->cols, cap * sizeof *cols);
        if (cols == NULL)
            return error_nomem(err, where);
        t->cols = cols;
        t->capcols = cap;
    }
    column *col = &t->cols[t->ncols];
    memset(col, 0, sizeof *col);
    col->name = malloc(len + 1);
    if (col->name == NULL)
        return error_nomem(err, where);
    memcpy(col->name, s, len);
    col->name[len] = '\0';
    col->src_col = src_col;
    col->src_row = src_row;
    /* A column found after rows were read (a data cell right of the
     * header) is blank in the rows before it. */
    if (t->caprows > 0) {
        col->type = malloc(t->caprows * sizeof *col->type);
        col->val = malloc(t->caprows * sizeof *col->val);
        if (col->type == NULL || col->val == NULL) {
            free(col->type);
            free(col->val);
            free(col->name);
            return error_nomem(err, where);
        }
        memset(col->type, CELL_BLANK, t->nrows * sizeof *col->type);
        for (size_t r = 0; r < t->nrows; r++)
            col->val[r].num = 0.0;
    }
    t->ncols++;
    return RF_OK;
}

/* Grows every row array to hold at least one more row. */
static int grow_rows(table *t)
{
    size_t cap = t->caprows ? t->caprows : ROWS_FIRST / 2;
    if (cap > SIZE_MAX / 2)
        return 0;
    cap *= 2;
    if (cap > SIZE_MAX / sizeof(cell_value) ||
        cap > SIZE_MAX / sizeof(uint32_t))
        return 0;
    uint32_t *src = realloc(t->src, cap * sizeof *src);
    if (src == NULL)
        return 0;
    t->src = src;
    /* A failure part way leaves some arrays larger than caprows, which is
     * harmless: caprows only moves once all of them are grown. */
    for (size_t c = 0; c < t->ncols; c++) {
        column *col = &t->cols[c];
        uint8_t *type = realloc(col->type, cap * sizeof *type);
        if (type == NULL)
            return 0;
        col->type = type;
        cell_value *val = realloc(col->val, cap * sizeof *val);
        if (val == NULL)
            return 0;
        col->val = val;
    }
    t->caprows = cap;
    return 1;
}

/* Makes the stage fit the columns; 0 on no memory. */
static int ready_stage(table *t)
{
    if (t->stage_type != NULL && t->stage_cols == t->ncols)
        return 1;
    assert(t->nstaged == 0);
    size_t nc = t->ncols;
    if (nc > SIZE_MAX / STAGE_ROWS / sizeof(cell_value))
        return 0;
    uint8_t *type = malloc(STAGE_ROWS * nc * sizeof *type);
    cell_value *val = malloc(STAGE_ROWS * nc * sizeof *val);
    if (type == NULL || val == NULL) {
        free(type);
        free(val);
        return 0;
    }
    free(t->stage_type);
    free(t->stage_val);
    t->stage_type = type;
    t->stage_val = val;
    t->stage_cols = nc;
    return 1;
}

/* Adds a row in the stage (or, with no columns, only its source row) and
 * points *type and *val at its first cell, which the caller fills: cell c
 * is type[c * STAGE_ROWS]. */
static rf_status new_row(table *t, uint32_t src_row, uint8_t **type,
                         cell_value **val, rf_error *err)
{
    if (t->nstaged == STAGE_ROWS)
        flush_stage(t);
    if ((t->nrows == t->caprows && !grow_rows(t)) ||
        (t->ncols > 0 && !ready_stage(t)))
        return error_nomem(err, t->file);
    t->src[t->nrows] = src_row;
    t->nrows++;
    if (t->ncols > 0) {
        *type = t->stage_type + t->nstaged;
        *val = t->stage_val + t->nstaged;
        t->nstaged++;
    }
    return RF_OK;
}

rf_status table_append_row(table *t, uint32_t src_row, rf_error *err)
{
    uint8_t *type = NULL;
    cell_value *val = NULL;
    rf_status s = new_row(t, src_row, &type, &val, err);
    if (s != RF_OK)
        return s;
    for (size_t c = 0; c < t->ncols; c++) {
        type[c * STAGE_ROWS] = CELL_BLANK;
        val[c * STAGE_ROWS].num = 0.0;
    }
    return RF_OK;
}

/* Replaces the last row's cell in col, keeping the type counts right. */
static void put_cell(table *t, size_t col, cell_type type, cell_value v)
{
    column *c = &t->cols[col];
    size_t r = t->nrows - 1;
    uint8_t *slot_type = &c->type[r];
    cell_value *slot_val = &c->val[r];
    if (t->nstaged > 0) {  /* then the last row is staged */
        size_t i = col * STAGE_ROWS + (t->nstaged - 1);
        slot_type = &t->stage_type[i];
        slot_val = &t->stage_val[i];
    }
    cell_type old = (cell_type)*slot_type;
    if (old != CELL_BLANK)
        c->count[old]--;
    if (old == CELL_TEXT && is_yesno_text(slot_val->text))
        c->yesno_text--;
    *slot_type = (uint8_t)type;
    *slot_val = v;
    if (type != CELL_BLANK)
        c->count[type]++;
    if (type == CELL_TEXT && is_yesno_text(v.text))
        c->yesno_text++;
}

static rf_status check_cell(const table *t, size_t col, rf_error *err)
{
    assert(t->nrows > 0 && col < t->ncols);
    if (t->nrows == 0 || col >= t->ncols)
        return error_set(err, RF_EINPUT, t->file,
                         "cell set outside the table (column %zu)", col);
    return RF_OK;
}

static rf_status set_value(table *t, size_t col, cell_type type, double v,
                           rf_error *err)
{
    rf_status s = check_cell(t, col, err);
    if (s != RF_OK)
        return s;
    cell_value cv;
    cv.num = v;
    put_cell(t, col, type, cv);
    return RF_OK;
}

static rf_status set_string(table *t, size_t col, cell_type type,
                            const char *s, size_t len, rf_error *err)
{
    rf_status st = check_cell(t, col, err);
    if (st != RF_OK)
        return st;
    cell_value cv;
    cv.text = arena_copy(t, s, len);
    if (cv.text == NULL) {
        char where[ERROR_WHERE_MAX];
        table_where(t, t->nrows - 1, col, where, sizeof where);
        return error_nomem(err, where);
    }
    put_cell(t, col, type, cv);
    return RF_OK;
}

rf_status table_set_number(table *t, size_t col, double v, rf_error *err)
{
    return set_value(t, col, CELL_NUMBER, v, err);
}

rf_status table_set_date(table *t, size_t col, double serial, rf_error *err)
{
    return set_value(t, col, CELL_DATE, serial, err);
}

rf_status table_set_bool(table *t, size_t col, int b, rf_error *err)
{
    return set_value(t, col, CELL_BOOL, b ? 1.0 : 0.0, err);
}

rf_status table_set_text(table *t, size_t col, const char *s, size_t len,
                         rf_error *err)
{
    return set_string(t, col, CELL_TEXT, s, len, err);
}

rf_status table_set_error(table *t, size_t col, const char *s, size_t len,
                          rf_error *err)
{
    return set_string(t, col, CELL_ERROR, s, len, err);
}

rf_status table_append_cells(table *t, uint32_t src_row,
                             const table_cell_in *cells, size_t n,
                             rf_error *err)
{
    assert(n <= t->ncols);
    if (n > t->ncols)
        return error_set(err, RF_EINPUT, t->file,
                         "a row of %zu cells for %zu columns", n, t->ncols);
    uint8_t *type = NULL;
    cell_value *val = NULL;
    rf_status s = new_row(t, src_row, &type, &val, err);
    if (s != RF_OK)
        return s;
    /* Each cell is written once, with no old value to uncount, in one call
     * per row rather than one per cell: this is a reader's inner loop. */
    size_t r = t->nrows - 1, nc = t->ncols;
    size_t c = 0;
    for (; c < n; c++) {
        column *col = &t->cols[c];
        cell_type k = cells[c].type;
        cell_value v;
        switch (k) {
        case CELL_BLANK:
            v.num = 0.0;
            break;
        case CELL_NUMBER:
        case CELL_DATE:
            v.num = cells[c].num;
            break;
        case CELL_BOOL:
            v.num = cells[c].num != 0.0 ? 1.0 : 0.0;
            break;
        case CELL_TEXT:
        case CELL_ERROR:
            v.text = arena_copy(t, cells[c].text, cells[c].len);
            if (v.text == NULL) {
                char where[ERROR_WHERE_MAX];
                table_where(t, r, c, where, sizeof where);
                s = error_nomem(err, where);
                goto blank_rest;
            }
            if (k == CELL_TEXT && is_yesno_text(v.text))
                col->yesno_text++;
            break;
        default:
            assert(0 && "not a cell type");
            s = error_set(err, RF_EINPUT, t->file, "cell type %d is not "
                          "one of the table's", (int)k);
            goto blank_rest;
        }
        type[c * STAGE_ROWS] = (uint8_t)k;
        val[c * STAGE_ROWS] = v;
        col->count[k]++;  /* count[CELL_BLANK] is not read */
    }
blank_rest:
    for (; c < nc; c++) {
        type[c * STAGE_ROWS] = CELL_BLANK;
        val[c * STAGE_ROWS].num = 0.0;
    }
    return s;
}

void table_trim(table *t)
{
    flush_stage(t);
    while (t->nrows > 0) {
        size_t r = t->nrows - 1;
        for (size_t c = 0; c < t->ncols; c++)
            if (t->cols[c].type[r] != CELL_BLANK)
                return;
        t->nrows--;
    }
}

size_t table_rows(const table *t) { return t->nrows; }
size_t table_cols(const table *t) { return t->ncols; }
const char *table_file(const table *t) { return t->file; }
const char *table_sheet(const table *t) { return t->sheet; }

const char *table_column_name(const table *t, size_t col)
{
    assert(col < t->ncols);
    return t->cols[col].name;
}

long table_find_column(const table *t, const char *name)
{
    size_t len = strlen(name);
    const char *s = table_trim_span(name, &len);
    for (size_t c = 0; c < t->ncols; c++)
        if (strlen(t->cols[c].name) == len &&
            memcmp(t->cols[c].name, s, len) == 0)
            return (long)c;
    return -1;
}

column_kind table_column_kind(const table *t, size_t col)
{
    assert(col < t->ncols);
    const column *c = &t->cols[col];
    size_t filled = 0;
    for (int k = CELL_NUMBER; k < CELL_TYPES; k++)
        filled += c->count[k];
    if (filled == 0)
        return KIND_BLANK;
    if (c->count[CELL_ERROR] > 0)
        return KIND_MIXED;
    if (c->count[CELL_NUMBER] == filled)
        return KIND_NUMBER;
    if (c->count[CELL_DATE] == filled)
        return KIND_DATE;
    if (c->count[CELL_BOOL] + c->yesno_text == filled)
        return KIND_YESNO;
    if (c->count[CELL_TEXT] == filled)
        return KIND_TEXT;
    return KIND_MIXED;
}

size_t table_column_blanks(const table *t, size_t col)
{
    assert(col < t->ncols);
    const column *c = &t->cols[col];
    size_t filled = 0;
    for (int k = CELL_NUMBER; k < CELL_TYPES; k++)
        filled += c->count[k];
    return t->nrows - filled;
}

const char *table_kind_name(column_kind k)
{
    switch (k) {
    case KIND_BLANK:  return "blank";
    case KIND_NUMBER: return "number";
    case KIND_DATE:   return "date";
    case KIND_YESNO:  return "yes-no";
    case KIND_TEXT:   return "text";
    case KIND_MIXED:  return "mixed";
    }
    return "unknown";
}

cell_type table_cell_type(const table *t, size_t row, size_t col)
{
    assert(row < t->nrows && col < t->ncols);
    cell_value v;
    return cell_at(t, row, col, &v);
}

double table_cell_number(const table *t, size_t row, size_t col)
{
    assert(row < t->nrows && col < t->ncols);
    cell_value v;
    cell_type k = cell_at(t, row, col, &v);
    if (k == CELL_NUMBER || k == CELL_DATE || k == CELL_BOOL)
        return v.num;
    return NAN;
}

const char *table_cell_text(const table *t, size_t row, size_t col)
{
    assert(row < t->nrows && col < t->ncols);
    cell_value v;
    cell_type k = cell_at(t, row, col, &v);
    if (k == CELL_TEXT || k == CELL_ERROR)
        return v.text;
    return NULL;
}

uint32_t table_row_source(const table *t, size_t row)
{
    assert(row < t->nrows);
    return t->src[row];
}

char *table_where(const table *t, size_t row, size_t col, char *buf,
                  size_t n)
{
    assert(row < t->nrows);
    unsigned long line = (unsigned long)t->src[row];
    if (t->sheet == NULL) {
        snprintf(buf, n, "%s:%lu", t->file, line);
    } else if (col == (size_t)-1) {
        snprintf(buf, n, "%s[%s] row %lu", t->file, t->sheet, line);
    } else {
        assert(col < t->ncols);
        char letters[16];
        table_column_letters(t->cols[col].src_col, letters, sizeof letters);
        snprintf(buf, n, "%s[%s]!%s%lu", t->file, t->sheet, letters, line);
    }
    return buf;
}

/* A date serial (with day fraction) as "2026-03-15", "2026-03-15 14:30" or
 * "2026-03-15 14:30:05"; the time is rounded to the second. */
static void show_date(double serial, char *buf, size_t n)
{
    double secs = floor(serial * 86400.0 + 0.5);
    double day = floor(secs / 86400.0);
    long s = (long)(secs - day * 86400.0);
    int y, m, d;
    if (table_serial_date(day, &y, &m, &d) != 0) {
        snprintf(buf, n, "%.15g", serial);
        return;
    }
    if (s == 0)
        snprintf(buf, n, "%04d-%02d-%02d", y, m, d);
    else if (s % 60 == 0)
        snprintf(buf, n, "%04d-%02d-%02d %02ld:%02ld", y, m, d, s / 3600,
                 s / 60 % 60);
    else
        snprintf(buf, n, "%04d-%02d-%02d %02ld:%02ld:%02ld", y, m, d,
                 s / 3600, s / 60 % 60, s % 60);
}

char *table_cell_show(const table *t, size_t row, size_t col, char *buf,
                      size_t n)
{
    assert(row < t->nrows && col < t->ncols);
    cell_value v;
    switch (cell_at(t, row, col, &v)) {
    case CELL_BLANK:
        snprintf(buf, n, "blank");
        break;
    case CELL_NUMBER:
        /* 15 digits: enough to recognise a value in a message; callers keep
         * the C locale (libraries.md A1) so the point is a '.'. */
        snprintf(buf, n, "%.15g", v.num);
        break;
    case CELL_DATE:
        show_date(v.num, buf, n);
        break;
    case CELL_BOOL:
        snprintf(buf, n, "%s", v.num != 0.0 ? "TRUE" : "FALSE");
        break;
    case CELL_TEXT:
        snprintf(buf, n, "'%s'", v.text);
        break;
    case CELL_ERROR:
        snprintf(buf, n, "%s", v.text);
        break;
    }
    return buf;
}

char *table_column_letters(uint32_t col, char *buf, size_t n)
{
    /* Bijective base 26: A..Z, AA..ZZ, AAA..; 7 letters cover UINT32_MAX. */
    char tmp[8];
    size_t k = 0;
    uint64_t x = (uint64_t)col + 1;
    while (x > 0) {
        x--;
        tmp[k++] = (char)('A' + x % 26);
        x /= 26;
    }
    size_t i = 0;
    if (n == 0)
        return buf;
    while (k > 0 && i + 1 < n)
        buf[i++] = tmp[--k];
    buf[i] = '\0';
    return buf;
}

/* Days since 1970-01-01 of a proleptic Gregorian date, and back: H. Hinnant,
 * "chrono-Compatible Low-Level Date Algorithms" (days_from_civil,
 * civil_from_days), public domain. */
static long days_from_civil(long y, long m, long d)
{
    y -= m <= 2;
    long era = (y >= 0 ? y : y - 399) / 400;
    long yoe = y - era * 400;
    long doy = (153 * (m + (m > 2 ? -3 : 9)) + 2) / 5 + d - 1;
    long doe = yoe * 365 + yoe / 4 - yoe / 100 + doy;
    return era * 146097 + doe - 719468;
}

static void civil_from_days(long z, int *y, int *m, int *d)
{
    z += 719468;
    long era = (z >= 0 ? z : z - 146096) / 146097;
    long doe = z - era * 146097;
    long yoe = (doe - doe / 1460 + doe / 36524 - doe / 146096) / 365;
    long doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    long mp = (5 * doy + 2) / 153;
    long dd = doy - (153 * mp + 2) / 5 + 1;
    long mm = mp < 10 ? mp + 3 : mp - 9;
    *y = (int)(yoe + era * 400 + (mm <= 2));
    *m = (int)mm;
    *d = (int)dd;
}

#define SERIAL_MAX 2958465.0  /* 9999-12-31, the last day spreadsheets show */

/* Serial 61 is 1900-03-01; from there on the serial counts real days.
 * Before it the serials are one lower than real days because of the
 * phantom 1900-02-29 (Microsoft KB 214326). */
static long epoch_days(void)
{
    return days_from_civil(1900, 3, 1) - 61;
}

double table_date_serial(int y, int m, int d)
{
    static const int mdays[12] = {31, 29, 31, 30, 31, 30,
                                  31, 31, 30, 31, 30, 31};
    if (y < 1900 || y > 9999 || m < 1 || m > 12 || d < 1 || d > mdays[m - 1])
        return -1;
    if (y == 1900 && m == 2 && d == 29)
        return 60;  /* the phantom day */
    if (m == 2 && d == 29 && !((y % 4 == 0 && y % 100 != 0) || y % 400 == 0))
        return -1;
    long days = days_from_civil(y, m, d) - epoch_days();
    if (days < 61)
        days--;
    return (double)days;
}

int table_serial_date(double serial, int *y, int *m, int *d)
{
    if (!(serial >= 1.0 && serial < SERIAL_MAX + 1.0))
        return -1;
    long s = (long)floor(serial);
    if (s == 60) {
        *y = 1900;
        *m = 2;
        *d = 29;
        return 0;
    }
    civil_from_days(epoch_days() + (s < 60 ? s + 1 : s), y, m, d);
    return 0;
}
