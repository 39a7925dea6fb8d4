/*
 * csv.c: the CSV reader (see csv.h). Streams the file in 64 KiB blocks
 * through a state machine (RFC 4180 quoting, CRLF/LF/CR line ends) and a
 * UTF-8 check, so memory holds one record at a time plus the table. Speed
 * (make bench) comes from the common record, a plain ASCII line, being split
 * in place eight bytes at a time (fast_record); every other byte takes the
 * general path (step), which decides all the edge cases. Not a spreadsheet
 * reader; the cell rules are in read_cell().
 *
 * Choices a user can see (docs/ should repeat them):
 * - Numbers: optional sign, digits with an optional '.', optional exponent.
 *   "1,234", "1 234", "$5", "inf" and "nan" are text: a thousands separator
 *   cannot be told from a decimal comma, and the engine's "is 'n/a', not a
 *   number" message is clearer than a silently wrong value.
 * - A line break inside a quoted value is kept as LF whatever the file used,
 *   so CRLF and LF files give the same table.
 * - Cells that hold only spaces are blank, quoted or not; a row whose cells
 *   are all blank is skipped like a blank line.
 * - Text after a closing quote ("ab"c) is kept (abc) rather than refused.
 */
#include "csv.h"

#include <assert.h>
#include <errno.h>
#include <float.h>
#include <locale.h>
#include <math.h>
#include <stdarg.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define CSV_BLOCK (64 * 1024)      /* bytes per fread */
#define CSV_FIELD_MAX (1u << 20)   /* a cell holds at most 32,767 characters
                                      in a workbook (libraries.md A1); a 1 MiB
                                      value means a closing quote is missing,
                                      and stopping there keeps a broken file
                                      from being buffered whole */
#define CSV_NUMBER_MAX 1024        /* longest number text converted */

enum { S_START, S_UNQUOTED, S_QUOTED, S_QUOTE_SEEN, S_AFTER_QUOTE };
enum { LC_PLAIN, LC_DELIM, LC_END, LC_CR, LC_OTHER };  /* see fast_record() */

typedef struct field {
    size_t off, len;  /* in reader.rec; the bytes are NUL-terminated */
    int quoted;
} field;

typedef struct reader {
    const char *name;
    char delim;
    int header_row;
    rf_warnings *warn;
    rf_error *err;
    table *t;

    uint32_t line;       /* physical line of the byte being read */
    int pending_cr;      /* last byte was CR: a following LF is part of it */
    int first_block;

    int u_need;          /* UTF-8 continuation bytes still expected */
    unsigned char u_lead, u_lo, u_hi;
    uint32_t u_line;

    int state;
    char *rec;           /* the current record's field bytes */
    size_t rec_len, rec_cap;
    field *fields;
    size_t nf, fcap;
    size_t field_off;    /* where the field being read starts in rec */
    int field_quoted;
    uint32_t field_line;
    int rec_started;
    uint32_t rec_line;

    int have_header;
    int saw_text;        /* a non-blank record was seen */
    uint32_t header_line;
    size_t ncols;

    table_cell_in *cells;  /* a record's cells, one per column */
    unsigned char stop_unquoted[256], stop_quoted[256];  /* see feed() */
    unsigned char line_class[256];                       /* fast_record() */
} reader;

static int is_space(char c)
{
    return c == ' ' || c == '\t';
}

static int is_digit(char c)
{
    return c >= '0' && c <= '9';
}


static const char *delim_name(char d)
{
    return d == '\t' ? "tab" : d == ';' ? "';'" : "','";
}

static rf_status fail_at(reader *r, uint32_t line, const char *fmt, ...)
    __attribute__((format(printf, 3, 4)));

/* An RF_EINPUT error at "name:line". */
static rf_status fail_at(reader *r, uint32_t line, const char *fmt, ...)
{
    char where[ERROR_WHERE_MAX];
    char msg[ERROR_MESSAGE_MAX];
    snprintf(where, sizeof where, "%s:%lu", r->name, (unsigned long)line);
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(msg, sizeof msg, fmt, ap);
    va_end(ap);
    return error_set(r->err, RF_EINPUT, where, "%s", msg);
}

/* ---- numbers and dates ------------------------------------------------ */

/* Longest text read as a number (see convert_c_locale). */
#define CSV_NUMBER_CHARS_MAX 1000

/* Powers of ten that are exact in a double (10^22 < 2^53 * 2^22). */
static const double pow10_exact[23] = {
    1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11,
    1e12, 1e13, 1e14, 1e15, 1e16, 1e17, 1e18, 1e19, 1e20, 1e21, 1e22};

/* strtod in the C locale, whatever the process locale: the syntax was
 * checked already, so only the conversion is left to the C library, which
 * rounds correctly (glibc). uselocale is per thread and leaves the global
 * locale alone. */
static int convert_c_locale(const char *s, size_t len, double *v)
{
    /* A fixed buffer, so running out of memory can never turn a number
     * into text; a "number" longer than this is text (no double has more
     * than 767 significant digits that matter, and none of them in a
     * spreadsheet user's file). */
    char buf[CSV_NUMBER_CHARS_MAX + 1];
    if (len > CSV_NUMBER_CHARS_MAX)
        return 0;
    memcpy(buf, s, len);
    buf[len] = '\0';
    int ok = 0;
    locale_t c = newlocale(LC_ALL_MASK, "C", (locale_t)0);
    if (c != (locale_t)0) {
        locale_t old = uselocale(c);
        char *end;
        double d = strtod(buf, &end);
        uselocale(old);
        freelocale(c);
        /* Underflow to a tiny or zero value is still the number written;
         * overflow to infinity is not a number a table can hold. */
        if (end == buf + len && isfinite(d)) {
            *v = d;
            ok = 1;
        }
    }
    return ok;
}

/* The common cell: a sign, at most 15 digits and an optional '.', so the
 * digits are an exact integer below 2^53 and the scale an exact power of
 * ten, and one division rounds correctly (Clinger's fast path, see
 * parse_number). Returns 0 for anything else, which parse_number reads.
 * s[0..len) is trimmed, len > 0. */
static inline int parse_short(const char *s, size_t len, double *v)
{
#if FLT_EVAL_METHOD == 0
    size_t i = s[0] == '+' || s[0] == '-';
    if (len - i > 16)
        return 0;
    size_t k = i, point = 0;  /* point: the index after the '.' */
    uint64_t m = 0;
    for (; k < len; k++) {
        unsigned d = (unsigned)(unsigned char)s[k] - '0';
        if (d < 10)
            m = m * 10 + d;
        else if (s[k] == '.' && point == 0)
            point = k + 1;
        else
            return 0;
    }
    size_t ndig = len - i - (point != 0);
    if (ndig == 0 || ndig > 15)
        return 0;
    size_t frac = point ? len - point : 0;
    double d = frac ? (double)m / pow10_exact[frac] : (double)m;
    *v = s[0] == '-' ? -d : d;
    return 1;
#else
    (void)s;
    (void)len;
    (void)v;
    return 0;
#endif
}

/* s[0..len), already trimmed, 0 < len <= CSV_NUMBER_MAX. */
static int parse_number(const char *s, size_t len, double *v)
{
    size_t i = 0;
    int neg = 0;
    if (s[i] == '+' || s[i] == '-') {
        neg = s[i] == '-';
        i++;
    }
    if (parse_short(s, len, v))
        return 1;
    uint64_t mant = 0;  /* significant digits, while they fit */
    int sig = 0, digits = 0, inexact = 0;
    long exp10 = 0;
    for (; i < len && is_digit(s[i]); i++, digits++) {
        int d = s[i] - '0';
        if (sig < 19 && (mant != 0 || d != 0)) {
            mant = mant * 10 + (uint64_t)d;
            sig++;
        } else if (sig >= 19) {
            inexact = 1;
        }
    }
    if (i < len && s[i] == '.') {
        for (i++; i < len && is_digit(s[i]); i++, digits++) {
            int d = s[i] - '0';
            if (sig < 19 && (mant != 0 || d != 0)) {
                mant = mant * 10 + (uint64_t)d;
                sig++;
                exp10--;
            } else if (sig >= 19) {
                inexact = 1;
            } else {
                exp10--;  /* a leading zero after the point */
            }
        }
    }
    if (digits == 0)
        return 0;
    if (i < len && (s[i] == 'e' || s[i] == 'E')) {
        i++;
        int eneg = 0;
        if (i < len && (s[i] == '+' || s[i] == '-')) {
            eneg = s[i] == '-';
            i++;
        }
        if (i == len || !is_digit(s[i]))
            return 0;
        long e = 0;
        for (; i < len && is_digit(s[i]); i++)
            if (e < 100000)
                e = e * 10 + (s[i] - '0');
        exp10 += eneg ? -e : e;
    }
    if (i != len)
        return 0;
    if (mant == 0 && !inexact) {
        *v = neg ? -0.0 : 0.0;
        return 1;
    }
#if FLT_EVAL_METHOD == 0
    /* Clinger's fast path (W. D. Clinger, "How to read floating point
     * numbers accurately", PLDI 1990): a mantissa below 2^53 and a power of
     * ten up to 10^22 are both exact doubles, so one IEEE multiply or
     * divide gives the correctly rounded result. Most table cells end here. */
    if (!inexact && mant <= (UINT64_C(1) << 53) && exp10 >= -22 &&
        exp10 <= 22) {
        double d = (double)mant;
        d = exp10 >= 0 ? d * pow10_exact[exp10] : d / pow10_exact[-exp10];
        *v = neg ? -d : d;
        return 1;
    }
#endif
    return convert_c_locale(s, len, v);
}

int csv_parse_number(const char *s, size_t len, double *v)
{
    s = table_trim_span(s, &len);
    if (len == 0 || len > CSV_NUMBER_MAX)
        return 0;
    return parse_number(s, len, v);
}

static int two_digits(const char *s, int *v)
{
    if (!is_digit(s[0]) || !is_digit(s[1]))
        return 0;
    *v = (s[0] - '0') * 10 + (s[1] - '0');
    return 1;
}

/* ISO 8601 calendar date YYYY-MM-DD, optionally followed by 'T' or ' ' and
 * HH:MM or HH:MM:SS (ISO 8601-1:2019 5.2.2, 5.3.1, extended format). */
static int parse_iso_date(const char *s, size_t n, double *serial)
{
    int c1, c2, m, d;
    if (n < 10 || s[4] != '-' || s[7] != '-' || !two_digits(s, &c1) ||
        !two_digits(s + 2, &c2) || !two_digits(s + 5, &m) ||
        !two_digits(s + 8, &d))
        return 0;
    double day = table_date_serial(c1 * 100 + c2, m, d);
    if (day < 0)
        return 0;
    if (n == 10) {
        *serial = day;
        return 1;
    }
    int h, mi, sec = 0;
    if ((n != 16 && n != 19) || (s[10] != 'T' && s[10] != ' ') ||
        !two_digits(s + 11, &h) || s[13] != ':' || !two_digits(s + 14, &mi))
        return 0;
    if (n == 19 && (s[16] != ':' || !two_digits(s + 17, &sec)))
        return 0;
    if (h > 23 || mi > 59 || sec > 59)
        return 0;
    *serial = day + (h * 3600 + mi * 60 + sec) / 86400.0;
    return 1;
}

/* ---- records ---------------------------------------------------------- */

/* The cell rules. A cell's first byte says which of them can apply, so
 * most cells are tried against one rule only. */
static void read_cell(const char *base, const field *f, table_cell_in *cell)
{
    const char *raw = base + f->off;
    size_t len = f->len;
    const char *s = table_trim_span(raw, &len);
    if (len == 0) {
        cell->type = CELL_BLANK;
        return;
    }
    char c = s[0];
    if (is_digit(c) || c == '-' || c == '+' || c == '.') {
        /* A date is never a number (it has a '-' after a digit twice), so
         * its '-' can pick which to try first. */
        if (len >= 10 && s[4] == '-' && parse_iso_date(s, len, &cell->num)) {
            cell->type = CELL_DATE;
            return;
        }
        if (parse_short(s, len, &cell->num) ||
            (len <= CSV_NUMBER_MAX && parse_number(s, len, &cell->num))) {
            cell->type = CELL_NUMBER;
            return;
        }
    } else if (c == 't' || c == 'T' || c == 'f' || c == 'F') {
        if (table_word_is(s, len, "true") || table_word_is(s, len, "false")) {
            cell->type = CELL_BOOL;
            cell->num = c == 't' || c == 'T';
            return;
        }
    }
    cell->type = CELL_TEXT;
    cell->text = f->quoted ? raw : s;
    cell->len = f->quoted ? f->len : len;
}

static int field_is_empty(const char *base, const field *f)
{
    size_t len = f->len;
    table_trim_span(base + f->off, &len);
    return len == 0;
}

static rf_status make_header(reader *r)
{
    r->have_header = 1;
    r->header_line = r->rec_line;
    r->ncols = r->nf;
    r->cells = calloc(r->ncols, sizeof *r->cells);
    if (r->cells == NULL)
        return error_nomem(r->err, r->name);
    for (size_t i = 0; i < r->nf; i++) {
        const char *name = r->rec + r->fields[i].off;
        char blank[32];
        if (field_is_empty(r->rec, &r->fields[i])) {
            char letters[16];
            table_column_letters((uint32_t)i, letters, sizeof letters);
            snprintf(blank, sizeof blank, "column %s", letters);
            name = blank;
            if (r->warn != NULL) {
                char where[ERROR_WHERE_MAX];
                snprintf(where, sizeof where, "%s:%lu", r->name,
                         (unsigned long)r->rec_line);
                if (error_warn(r->warn, where,
                               "column %s has no name in the header; "
                               "calling it '%s'", letters, blank) != RF_OK)
                    return error_nomem(r->err, where);
            }
        }
        rf_status s = table_add_column(r->t, name, (uint32_t)i, r->rec_line,
                                       r->err);
        if (s != RF_OK)
            return s;
    }
    return RF_OK;
}

/* A record after the header: its cells go into a new row of the table.
 * A row whose cells are all blank is skipped like a blank line. */
static rf_status end_data_record(reader *r, const char *base)
{
    size_t n = r->nf < r->ncols ? r->nf : r->ncols;
    int filled = 0;
    for (size_t i = 0; i < n; i++) {
        read_cell(base, &r->fields[i], &r->cells[i]);
        filled |= r->cells[i].type != CELL_BLANK;
    }
    for (size_t i = n; i < r->nf; i++)
        if (!field_is_empty(base, &r->fields[i])) {
            char where[ERROR_WHERE_MAX];
            snprintf(where, sizeof where, "%s:%lu", r->name,
                     (unsigned long)r->rec_line);
            return error_set(r->err, RF_EINPUT, where,
                             "this row has %zu values but the header "
                             "(line %lu) names %zu columns; a value that "
                             "contains %s must be in double quotes",
                             r->nf, (unsigned long)r->header_line,
                             r->ncols, delim_name(r->delim));
        }
    if (!filled)
        return RF_OK;
    r->saw_text = 1;
    return table_append_cells(r->t, r->rec_line, r->cells, n, r->err);
}

/* A whole record: r->fields, with offsets from base (r->rec, or the line
 * in the read buffer for a record read by fast_record). Only r->rec's
 * fields are NUL-terminated, so the header always comes through r->rec. */
static rf_status end_record(reader *r, const char *base)
{
    if (r->have_header)
        return end_data_record(r, base);
    int blank = 1;
    for (size_t i = 0; i < r->nf && blank; i++)
        blank = field_is_empty(base, &r->fields[i]);
    if (blank)
        return RF_OK;
    r->saw_text = 1;
    if (r->header_row > 0 && r->rec_line < (uint32_t)r->header_row)
        return RF_OK;
    if (r->header_row > 0 && r->rec_line != (uint32_t)r->header_row)
        return fail_at(r, (uint32_t)r->header_row,
                       "no header row on line %d: that line is blank, "
                       "inside a quoted value, or past the end of the "
                       "file", r->header_row);
    assert(base == r->rec);
    return make_header(r);
}

/* ---- the byte machine ------------------------------------------------- */

static rf_status grow_rec(reader *r)
{
    size_t cap = r->rec_cap ? 2 * r->rec_cap : 4096;
    if (cap < r->rec_cap)
        return error_nomem(r->err, r->name);
    char *p = realloc(r->rec, cap);
    if (p == NULL)
        return error_nomem(r->err, r->name);
    r->rec = p;
    r->rec_cap = cap;
    return RF_OK;
}

static rf_status push(reader *r, char c)
{
    if (r->rec_len - r->field_off >= CSV_FIELD_MAX)
        return fail_at(r, r->field_line,
                       "a value starting on this line is longer than %u "
                       "bytes; is a closing quote missing?", CSV_FIELD_MAX);
    if (r->rec_len == r->rec_cap) {
        rf_status s = grow_rec(r);
        if (s != RF_OK)
            return s;
    }
    r->rec[r->rec_len++] = c;
    return RF_OK;
}

/* Grows r->fields to hold one more field. */
static rf_status grow_fields(reader *r)
{
    size_t cap = r->fcap ? 2 * r->fcap : 64;
    if (cap > SIZE_MAX / sizeof(field))
        return error_nomem(r->err, r->name);
    field *p = realloc(r->fields, cap * sizeof *p);
    if (p == NULL)
        return error_nomem(r->err, r->name);
    r->fields = p;
    r->fcap = cap;
    return RF_OK;
}

static rf_status end_field(reader *r)
{
    rf_status s = push(r, '\0');
    if (s != RF_OK)
        return s;
    if (r->nf == r->fcap) {
        s = grow_fields(r);
        if (s != RF_OK)
            return s;
    }
    field *f = &r->fields[r->nf++];
    f->off = r->field_off;
    f->len = r->rec_len - 1 - r->field_off;
    f->quoted = r->field_quoted;
    r->field_off = r->rec_len;
    r->field_quoted = 0;
    r->state = S_START;
    return RF_OK;
}

static rf_status finish_record(reader *r)
{
    rf_status s = end_field(r);
    if (s == RF_OK)
        s = end_record(r, r->rec);
    r->rec_len = 0;
    r->field_off = 0;
    r->nf = 0;
    r->rec_started = 0;
    return s;
}

static rf_status bad_utf8(reader *r, unsigned char byte, uint32_t line)
{
    char where[ERROR_WHERE_MAX];
    snprintf(where, sizeof where, "%s:%lu", r->name, (unsigned long)line);
    return error_set(r->err, RF_EINPUT, where,
                     "text is not valid UTF-8 (byte 0x%02X); save the file "
                     "as UTF-8", byte);
}

/* Well-formed UTF-8 byte sequences: The Unicode Standard 15.0, table 3-7.
 * A broken sequence is reported by its lead byte, which is the character
 * the user typed (0xE9 for a Latin-1 'e' with acute accent). */
static rf_status check_utf8(reader *r, unsigned char c)
{
    if (r->u_need > 0) {
        if (c < r->u_lo || c > r->u_hi)
            return bad_utf8(r, r->u_lead, r->u_line);
        r->u_lo = 0x80;
        r->u_hi = 0xBF;
        r->u_need--;
        return RF_OK;
    }
    r->u_lead = c;
    r->u_line = r->line;
    r->u_lo = 0x80;
    r->u_hi = 0xBF;
    if (c >= 0xC2 && c <= 0xDF) {
        r->u_need = 1;
    } else if (c >= 0xE0 && c <= 0xEF) {
        r->u_need = 2;
        if (c == 0xE0)
            r->u_lo = 0xA0;
        else if (c == 0xED)
            r->u_hi = 0x9F;
    } else if (c >= 0xF0 && c <= 0xF4) {
        r->u_need = 3;
        if (c == 0xF0)
            r->u_lo = 0x90;
        else if (c == 0xF4)
            r->u_hi = 0x8F;
    } else {
        return bad_utf8(r, c, r->line);
    }
    return RF_OK;
}

static void start_record(reader *r)
{
    if (!r->rec_started) {
        r->rec_started = 1;
        r->rec_line = r->line;
    }
}

/* One byte through the state machine: the general path, taken for the
 * bytes that end a run of plain field bytes (see feed). */
static rf_status step(reader *r, unsigned char c)
{
    rf_status s = RF_OK;
    if (c >= 0x80 || r->u_need > 0) {
        s = check_utf8(r, c);
        if (s != RF_OK)
            return s;
        if (c >= 0x80) {
            r->pending_cr = 0;
            start_record(r);
            if (r->state == S_START) {
                r->field_line = r->line;
                r->state = S_UNQUOTED;
            } else if (r->state == S_QUOTE_SEEN) {
                r->state = S_AFTER_QUOTE;
            }
            return push(r, (char)c);
        }
    }
    if (c == 0)
        return error_set(r->err, RF_EINPUT, r->name,
                         "binary file, not CSV text (a NUL byte on "
                         "line %lu)", (unsigned long)r->line);
    if (c == '\n' && r->pending_cr) {
        r->pending_cr = 0;
        return RF_OK;
    }
    r->pending_cr = c == '\r';
    int nl = c == '\n' || c == '\r';
    switch (r->state) {
    case S_START:
        if (nl) {
            if (r->rec_started)
                s = finish_record(r);
        } else if (c == (unsigned char)r->delim) {
            start_record(r);
            s = end_field(r);
        } else if (c == '"') {
            start_record(r);
            r->field_line = r->line;
            r->field_quoted = 1;
            r->state = S_QUOTED;
        } else if (is_space((char)c)) {
            start_record(r);  /* leading spaces are trimmed anyway */
        } else {
            start_record(r);
            r->field_line = r->line;
            r->state = S_UNQUOTED;
            s = push(r, (char)c);
        }
        break;
    case S_UNQUOTED:
        if (nl)
            s = finish_record(r);
        else if (c == (unsigned char)r->delim)
            s = end_field(r);
        else
            s = push(r, (char)c);
        break;
    case S_QUOTED:
        if (c == '"')
            r->state = S_QUOTE_SEEN;
        else
            s = push(r, nl ? '\n' : (char)c);
        break;
    case S_QUOTE_SEEN:
    case S_AFTER_QUOTE:
        if (c == '"' && r->state == S_QUOTE_SEEN) {
            r->state = S_QUOTED;  /* a doubled quote */
            s = push(r, '"');
        } else if (nl) {
            s = finish_record(r);
        } else if (c == (unsigned char)r->delim) {
            s = end_field(r);
        } else if (is_space((char)c)) {
            r->state = S_AFTER_QUOTE;
        } else {
            r->state = S_AFTER_QUOTE;
            s = push(r, (char)c);
        }
        break;
    }
    if (nl)
        r->line++;
    return s;
}

/* Appends n plain bytes to the field being read, as n push() calls would. */
static rf_status append(reader *r, const unsigned char *p, size_t n)
{
    if (r->rec_len - r->field_off + n > CSV_FIELD_MAX)
        return fail_at(r, r->field_line,
                       "a value starting on this line is longer than %u "
                       "bytes; is a closing quote missing?", CSV_FIELD_MAX);
    while (r->rec_cap - r->rec_len < n) {
        rf_status s = grow_rec(r);
        if (s != RF_OK)
            return s;
    }
    memcpy(r->rec + r->rec_len, p, n);
    r->rec_len += n;
    return RF_OK;
}

#define ONES UINT64_C(0x0101010101010101)
#define HIGHS UINT64_C(0x8080808080808080)

/* The high bit of each byte of x that is not zero. Exact: no carry crosses
 * a byte, unlike the shorter (x - ONES) & ~x test, which can flag a byte
 * above a zero one. */
static inline uint64_t nonzero_bytes(uint64_t x)
{
    return (((x & ~HIGHS) + ~HIGHS) | x) & HIGHS;
}

/* A mask with the high bit set in each byte of x that ends a run of
 * plain bytes: the delimiter, LF, CR, '"', NUL, or 0x80 and above. This is
 * the UTF-8 check's fast path: a word of ASCII is one test (SWAR, H. S.
 * Warren, "Hacker's Delight", 2nd ed., section 6-1). */
static inline uint64_t stop_bytes(uint64_t x, uint64_t delim)
{
    uint64_t plain = nonzero_bytes(x ^ delim) &
                     nonzero_bytes(x ^ (ONES * '\n')) &
                     nonzero_bytes(x ^ (ONES * '\r')) &
                     nonzero_bytes(x ^ (ONES * '"')) & nonzero_bytes(x);
    return (~plain | x) & HIGHS;
}

/* The common record, read in place: a whole line in buf[0..n) after the
 * header, plain ASCII without quotes or NUL, ending in LF or CRLF. Its
 * fields are split where they lie (eight bytes at a time: each word's stop
 * bytes are found at once and visited in order) and handed to end_record
 * without copying. Returns the bytes used (the line and its line end), or 0
 * when the record is not such a line (then nothing has changed and step()
 * reads it); sets *s. */
static size_t fast_record(reader *r, const unsigned char *buf, size_t n,
                          rf_status *s)
{
    const unsigned char *cls = r->line_class;
    const uint64_t delim = ONES * (unsigned char)r->delim;
    size_t w = 0, start = 0, nf = 0;
    *s = RF_OK;
    for (;;) {
        uint64_t stop;
        if (w >= n)
            return 0;
        if (n - w >= 8) {
            uint64_t x;
            memcpy(&x, buf + w, 8);
#if defined(__BYTE_ORDER__) && __BYTE_ORDER__ == __ORDER_BIG_ENDIAN__
            x = __builtin_bswap64(x);  /* byte j of the text at bits 8j */
#endif
            stop = stop_bytes(x, delim);
        } else {
            /* The last few bytes of the buffer, as a mask of the same
             * shape. */
            stop = 0;
            for (size_t j = w; j < n; j++)
                if (cls[buf[j]] != LC_PLAIN)
                    stop |= UINT64_C(0x80) << (8 * (j - w));
        }
        while (stop != 0) {
            size_t j = w + (size_t)__builtin_ctzll(stop) / 8;
            stop &= stop - 1;
            unsigned char k = cls[buf[j]];
            size_t next = j + 1;
            if (k == LC_CR) {
                if (next == n || buf[next] != '\n')
                    return 0;  /* a lone CR ends a line too: step() knows */
                k = LC_END;
                next++;
            } else if (k == LC_OTHER) {
                return 0;
            }
            if (nf == r->fcap && (*s = grow_fields(r)) != RF_OK)
                return 0;
            field *f = &r->fields[nf++];
            f->off = start;
            f->len = j - start;
            f->quoted = 0;
            start = next;
            if (k == LC_END) {
                r->nf = nf;
                r->rec_line = r->line;
                *s = end_record(r, (const char *)buf);
                r->nf = 0;
                r->line++;
                return start;
            }
        }
        w += 8;
    }
}

/* Inside a field, runs of plain bytes (ASCII that is neither a line end,
 * the delimiter, a quote in a quoted field, nor NUL) only need copying: they
 * are found with a table lookup per byte and copied at once; every other
 * byte, and every byte outside a field, goes through step(). */
static rf_status feed(reader *r, const unsigned char *buf, size_t n)
{
    size_t i = 0;
    while (i < n) {
        if (r->state == S_START && !r->rec_started && r->have_header &&
            r->u_need == 0 && !r->pending_cr) {
            rf_status s;
            size_t used = fast_record(r, buf + i, n - i, &s);
            if (s != RF_OK)
                return s;
            if (used > 0) {
                i += used;
                continue;
            }
        }
        if (r->u_need == 0 && !r->pending_cr &&
            (r->state == S_UNQUOTED || r->state == S_QUOTED)) {
            const unsigned char *stop =
                r->state == S_UNQUOTED ? r->stop_unquoted : r->stop_quoted;
            size_t j = i;
            while (j < n && !stop[buf[j]])
                j++;
            if (j > i) {
                rf_status s = append(r, buf + i, j - i);
                if (s != RF_OK)
                    return s;
                i = j;
                if (i == n)
                    break;
            }
        }
        rf_status s = step(r, buf[i++]);
        if (s != RF_OK)
            return s;
    }
    return RF_OK;
}

/* The byte classes that feed() and fast_record() scan with. */
static void make_tables(reader *r)
{
    for (int c = 0; c < 256; c++) {
        int stop = c == 0 || c == '\n' || c == '\r' || c >= 0x80;
        int delim = c == (unsigned char)r->delim;
        r->stop_unquoted[c] = (unsigned char)(stop || delim);
        r->stop_quoted[c] = (unsigned char)(stop || c == '"');
        r->line_class[c] = delim ? LC_DELIM : c == '\n' ? LC_END :
                           c == '\r' ? LC_CR :
                           stop || c == '"' ? LC_OTHER : LC_PLAIN;
    }
}

static rf_status finish(reader *r)
{
    if (r->u_need > 0)
        return bad_utf8(r, r->u_lead, r->u_line);
    if (r->state == S_QUOTED)
        return fail_at(r, r->field_line,
                       "a quoted value starting on this line is never "
                       "closed (no closing '\"' before the end of the file)");
    if (r->rec_started) {
        rf_status s = finish_record(r);
        if (s != RF_OK)
            return s;
    }
    if (!r->have_header) {
        if (!r->saw_text)
            return error_set(r->err, RF_EINPUT, r->name, "file is empty");
        return fail_at(r, (uint32_t)r->header_row,
                       "no header row on line %d: that line is blank, "
                       "inside a quoted value, or past the end of the file",
                       r->header_row);
    }
    return RF_OK;
}

/* ---- delimiter detection ---------------------------------------------- */

/* Counts ',' ';' and tab outside quotes on the header line (opt->header_row,
 * or the first line with anything but spaces and candidate delimiters) and
 * picks the most frequent; ties go to ',', then ';'. Reads only up to the
 * end of that line, then rewinds. Errors in the file are left to the real
 * pass, which reports them with their place. */
static rf_status detect_delimiter(FILE *f, const char *name, int header_row,
                                  unsigned char *buf, char *out,
                                  rf_error *err)
{
    size_t count[3] = {0, 0, 0};
    int inq = 0, pending_cr = 0, nonblank = 0, done = 0, first = 1;
    uint32_t line = 1, line_start = 1;
    size_t n;
    while (!done && (n = fread(buf, 1, CSV_BLOCK, f)) > 0) {
        size_t i = 0;
        if (first && n >= 3 && buf[0] == 0xEF && buf[1] == 0xBB &&
            buf[2] == 0xBF)
            i = 3;
        first = 0;
        for (; i < n; i++) {
            unsigned char c = buf[i];
            if (c == '\n' && pending_cr) {
                pending_cr = 0;
                continue;
            }
            pending_cr = c == '\r';
            int nl = c == '\n' || c == '\r';
            if (c == '"') {
                inq = !inq;
                nonblank = 1;
            } else if (nl && !inq) {
                if ((header_row == 0 && nonblank) ||
                    (header_row > 0 && line_start == (uint32_t)header_row)) {
                    done = 1;
                    break;
                }
                count[0] = count[1] = count[2] = 0;
                nonblank = 0;
                line_start = line + 1;
            } else if (!inq) {
                if (c == ',')
                    count[0]++;
                else if (c == ';')
                    count[1]++;
                else if (c == '\t')
                    count[2]++;
                else if (c != ' ')
                    nonblank = 1;
            }
            if (nl)
                line++;
        }
    }
    if (ferror(f))
        return error_set(err, RF_ESYSTEM, name, "cannot read the file: %s",
                         strerror(errno));
    char d = ',';
    size_t best = count[0];
    if (count[1] > best) {
        d = ';';
        best = count[1];
    }
    if (count[2] > best)
        d = '\t';
    *out = d;
    if (fseek(f, 0, SEEK_SET) != 0)
        return error_set(err, RF_ESYSTEM, name,
                         "cannot read the file a second time: %s",
                         strerror(errno));
    return RF_OK;
}

/* ---- entry point ------------------------------------------------------ */

static int looks_like_workbook(const unsigned char *b, size_t n)
{
    static const unsigned char zip[4] = {'P', 'K', 3, 4};
    static const unsigned char cfbf[4] = {0xD0, 0xCF, 0x11, 0xE0};
    return n >= 4 && (memcmp(b, zip, 4) == 0 || memcmp(b, cfbf, 4) == 0);
}

rf_status csv_read(const char *path, const char *name, const csv_options *opt,
                   table **out, rf_warnings *warn, rf_error *err)
{
    *out = NULL;
    if (name == NULL)
        name = path;
    FILE *f = fopen(path, "rb");
    if (f == NULL)
        return error_set(err, RF_ESYSTEM, name, "cannot open the file: %s",
                         strerror(errno));

    rf_status s = RF_OK;
    reader r;
    memset(&r, 0, sizeof r);
    r.name = name;
    r.header_row = opt ? opt->header_row : 0;
    r.delim = opt ? opt->delimiter : 0;
    r.warn = warn;
    r.err = err;
    r.line = 1;
    r.state = S_START;
    unsigned char *buf = malloc(CSV_BLOCK);
    r.t = table_create(name, NULL);
    if (buf == NULL || r.t == NULL) {
        s = error_nomem(err, name);
        goto done;
    }
    if (r.header_row < 0) {
        s = error_set(err, RF_EINPUT, name, "header row %d is not a line "
                      "number", r.header_row);
        goto done;
    }
    if (r.delim == 0) {
        s = detect_delimiter(f, name, r.header_row, buf, &r.delim, err);
        if (s != RF_OK)
            goto done;
    }

    make_tables(&r);

    size_t n;
    int first = 1;
    while ((n = fread(buf, 1, CSV_BLOCK, f)) > 0) {
        size_t i = 0;
        if (first) {
            first = 0;
            const unsigned char *nul = memchr(buf, 0, n);
            if (nul != NULL) {
                unsigned line = 1;
                for (const unsigned char *q = buf; q < nul; q++)
                    line += *q == '\n';
                char where[ERROR_WHERE_MAX];
                snprintf(where, sizeof where, "%s:%u", name, line);
                s = error_set(err, RF_EINPUT, where,
                              "binary file, not CSV text (a NUL byte on this "
                              "line)%s",
                              looks_like_workbook(buf, n) ?
                              " (it looks like a spreadsheet workbook; give "
                              "its .xlsx, .xls or .ods name)" : "");
                goto done;
            }
            if (n >= 3 && buf[0] == 0xEF && buf[1] == 0xBB && buf[2] == 0xBF)
                i = 3;
        }
        s = feed(&r, buf + i, n - i);
        if (s != RF_OK)
            goto done;
    }
    if (ferror(f)) {
        s = error_set(err, RF_ESYSTEM, name, "cannot read the file: %s",
                      strerror(errno));
        goto done;
    }
    s = finish(&r);
    if (s == RF_OK) {
        table_trim(r.t);
        *out = r.t;
        r.t = NULL;
    }
done:
    table_free(r.t);
    free(r.rec);
    free(r.fields);
    free(r.cells);
    free(buf);
    fclose(f);
    return s;
}
