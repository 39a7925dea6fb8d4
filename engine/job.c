/*
 * job.c: the job-file parser (see job.h, docs/job-file.md). Turns text into
 * a checked job record and says exactly which line is wrong and why. Does
 * not open the data, so column names are only checked later, in design.c.
 */
#include "job.h"

#include <errno.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* ---------------------------------------------------------------- keywords */

typedef enum kw {
    KW_JOB, KW_DATA, KW_SCORE, KW_TARGET, KW_INPUTS, KW_CATEGORIES, KW_DERIVE,
    KW_MODEL, KW_ID, KW_OUTPUT, KW_MISSING, KW_INTERCEPT, KW_RIDGE,
    KW_POSITIVE, KW_THRESHOLD, KW_LEVEL, KW_FOLDS, KW_SEED, KW_HIDDEN,
    KW_SOLVER, KW_RATE, KW_EPOCHS, KW_RESTARTS, KW_REPORT, KW_COUNT
} kw;

/* In kw order; `once` marks the directives that may appear only once. */
static const struct { const char *name; int once; } keywords[KW_COUNT] = {
    {"job", 1}, {"data", 1}, {"score", 1}, {"target", 1}, {"inputs", 0},
    {"categories", 0}, {"derive", 0}, {"model", 1}, {"id", 1},
    {"output", 1}, {"missing", 1}, {"intercept", 1}, {"ridge", 1},
    {"positive", 1}, {"threshold", 1}, {"level", 1}, {"folds", 1},
    {"seed", 1}, {"hidden", 1}, {"solver", 1}, {"rate", 1}, {"epochs", 1},
    {"restarts", 1}, {"report", 0},
};

/* ------------------------------------------------------------------ parser */

typedef enum tok_kind { TOK_WORD, TOK_QUOTED, TOK_COMMA } tok_kind;

/* A token of the current line; text points into the parser's own copy of
 * the line, NUL-terminated in place (a quoted token already unescaped). */
typedef struct token {
    tok_kind kind;
    const char *text;
} token;

typedef struct parser {
    job *j;
    const char *path;     /* the job file as named, for messages */
    int line;             /* current line, 1-based */
    const char *linebase; /* start of the current line, for columns */
    int seen[KW_COUNT];   /* line of the first use of each keyword, 0 = not */
    token *tok;
    size_t ntok, captok;
    rf_error *err;
} parser;

static rf_status failv(parser *p, int line, const char *fmt, va_list ap)
{
    if (p->err == NULL)
        return RF_EINPUT;
    p->err->status = RF_EINPUT;
    snprintf(p->err->where, sizeof p->err->where, "%s:%d", p->path, line);
    vsnprintf(p->err->message, sizeof p->err->message, fmt, ap);
    return RF_EINPUT;
}

/* An RF_EINPUT error at the current line. */
static rf_status fail(parser *p, const char *fmt, ...)
    __attribute__((format(printf, 2, 3)));
static rf_status fail(parser *p, const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    rf_status s = failv(p, p->line, fmt, ap);
    va_end(ap);
    return s;
}

/* An RF_EINPUT error at a given line. */
static rf_status fail_at(parser *p, int line, const char *fmt, ...)
    __attribute__((format(printf, 3, 4)));
static rf_status fail_at(parser *p, int line, const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    rf_status s = failv(p, line, fmt, ap);
    va_end(ap);
    return s;
}

static rf_status nomem(parser *p)
{
    char where[ERROR_WHERE_MAX];
    snprintf(where, sizeof where, "%s:%d", p->path, p->line);
    return error_nomem(p->err, where);
}

/* ----------------------------------------------------------- small helpers */

static int is_blank(char c)
{
    return c == ' ' || c == '\t' || c == '\r' || c == '\v' || c == '\f';
}

static char lower(char c)
{
    return (c >= 'A' && c <= 'Z') ? (char)(c - 'A' + 'a') : c;
}

static int same_word(const char *a, const char *b)
{
    for (; *a && *b; a++, b++)
        if (lower(*a) != lower(*b))
            return 0;
    return *a == *b;
}

static int is_digits(const char *s)
{
    if (*s == '\0')
        return 0;
    for (; *s; s++)
        if (*s < '0' || *s > '9')
            return 0;
    return 1;
}

/* A decimal number as a job writes it: optional sign, digits with an
 * optional point, optional exponent. Not strtod's whole language (no hex,
 * inf or nan, no leading blanks), and the point is always '.'. */
static int parse_number(const char *s, double *v)
{
    const char *q = s;
    int digits = 0;
    if (*q == '+' || *q == '-')
        q++;
    while (*q >= '0' && *q <= '9') { q++; digits++; }
    if (*q == '.') {
        q++;
        while (*q >= '0' && *q <= '9') { q++; digits++; }
    }
    if (digits == 0)
        return 0;
    if (*q == 'e' || *q == 'E') {
        q++;
        if (*q == '+' || *q == '-')
            q++;
        if (!(*q >= '0' && *q <= '9'))
            return 0;
        while (*q >= '0' && *q <= '9')
            q++;
    }
    if (*q != '\0')
        return 0;
    errno = 0;
    char *end;
    double x = strtod(s, &end);
    if (errno == ERANGE && (x > 1.0 || x < -1.0))
        return 0;  /* overflow; underflow to a tiny number is harmless */
    *v = x;
    return 1;
}

/* A whole number 0..max written with digits only. */
static int parse_count(const char *s, unsigned long max, unsigned long *v)
{
    if (!is_digits(s))
        return 0;
    unsigned long x = 0;
    for (; *s; s++) {
        unsigned d = (unsigned)(*s - '0');
        if (x > (max - d) / 10)
            return 0;
        x = 10 * x + d;
    }
    *v = x;
    return 1;
}

/* Checks that s is well-formed UTF-8 (no overlong forms, no surrogates,
 * nothing above U+10FFFF; RFC 3629 section 4). Returns the 1-based byte
 * column of the first bad byte, or 0 when s is valid. */
static int utf8_bad_column(const char *s)
{
    const unsigned char *u = (const unsigned char *)s, *b = u;
    while (*u) {
        unsigned c = *u;
        int n;
        unsigned lo = 0x80, hi = 0xBF;
        if (c < 0x80) { u++; continue; }
        else if (c >= 0xC2 && c <= 0xDF) n = 1;
        else if (c == 0xE0) { n = 2; lo = 0xA0; }
        else if (c >= 0xE1 && c <= 0xEC) n = 2;
        else if (c == 0xED) { n = 2; hi = 0x9F; }
        else if (c >= 0xEE && c <= 0xEF) n = 2;
        else if (c == 0xF0) { n = 3; lo = 0x90; }
        else if (c >= 0xF1 && c <= 0xF3) n = 3;
        else if (c == 0xF4) { n = 3; hi = 0x8F; }
        else return (int)(u - b) + 1;
        if (u[1] < lo || u[1] > hi)
            return (int)(u - b) + 1;
        for (int k = 2; k <= n; k++)
            if (u[k] < 0x80 || u[k] > 0xBF)
                return (int)(u - b) + 1;
        u += n + 1;
    }
    return 0;
}

/* ---------------------------------------------------------- job_nearest */

#define NEAREST_MAX 64

/* Optimal string alignment distance (Damerau-Levenshtein restricted so no
 * substring is edited twice), case-folded; Navarro, "A guided tour to
 * approximate string matching", ACM Computing Surveys 33(1), 2001, sec. 2. */
static size_t osa_distance(const char *a, size_t m, const char *b, size_t n)
{
    size_t row[3][NEAREST_MAX + 1];
    size_t *prev2 = row[0], *prev = row[1], *cur = row[2];
    for (size_t k = 0; k <= n; k++)
        prev[k] = k;
    for (size_t i = 1; i <= m; i++) {
        cur[0] = i;
        for (size_t k = 1; k <= n; k++) {
            size_t cost = lower(a[i - 1]) == lower(b[k - 1]) ? 0 : 1;
            size_t d = prev[k] + 1;
            if (cur[k - 1] + 1 < d)
                d = cur[k - 1] + 1;
            if (prev[k - 1] + cost < d)
                d = prev[k - 1] + cost;
            if (i > 1 && k > 1 && lower(a[i - 1]) == lower(b[k - 2])
                && lower(a[i - 2]) == lower(b[k - 1])
                && prev2[k - 2] + 1 < d)
                d = prev2[k - 2] + 1;
            cur[k] = d;
        }
        size_t *t = prev2;
        prev2 = prev;
        prev = cur;
        cur = t;
    }
    return prev[n];
}

const char *job_nearest(const char *name, const char *const *candidates,
                        size_t n)
{
    if (name == NULL)
        return NULL;
    size_t m = strlen(name);
    if (m == 0 || m > NEAREST_MAX)
        return NULL;
    const char *best = NULL;
    size_t best_d = (size_t)-1;
    for (size_t i = 0; i < n; i++) {
        if (candidates[i] == NULL)
            continue;
        size_t c = strlen(candidates[i]);
        if (c == 0 || c > NEAREST_MAX)
            continue;
        size_t longer = m > c ? m : c;
        size_t limit = longer / 3 > 1 ? longer / 3 : 1;
        size_t d = osa_distance(name, m, candidates[i], c);
        if (d <= limit && d < best_d) {
            best = candidates[i];
            best_d = d;
        }
    }
    return best;
}

/* " (did you mean 'x'?)" when one of the candidates is near, else "". */
static const char *suggest(char *buf, size_t len, const char *name,
                           const char *const *candidates, size_t n)
{
    const char *near = job_nearest(name, candidates, n);
    if (near == NULL)
        return "";
    snprintf(buf, len, " (did you mean '%s'?)", near);
    return buf;
}

/* ------------------------------------------------------------- tokenizer */

static rf_status push(parser *p, tok_kind kind, const char *text)
{
    if (p->ntok == p->captok) {
        size_t cap = p->captok ? 2 * p->captok : 16;
        token *t = realloc(p->tok, cap * sizeof *t);
        if (t == NULL)
            return nomem(p);
        p->tok = t;
        p->captok = cap;
    }
    p->tok[p->ntok].kind = kind;
    p->tok[p->ntok].text = text;
    p->ntok++;
    return RF_OK;
}

/* Reads a double-quoted string starting at *s (which points at the opening
 * quote), unescaping "" to " in place. On success *s points just past the
 * closing quote and *text at the NUL-terminated content. */
static rf_status read_quoted(parser *p, char **s, const char **text)
{
    char *open = *s;
    char *q = open + 1, *w = q;
    for (;;) {
        if (*q == '\0')
            return fail(p, "unterminated double quote: the '\"' at column %d "
                        "is never closed on this line",
                        (int)(open - p->linebase) + 1);
        if (*q == '"') {
            if (q[1] == '"') {
                *w++ = '"';
                q += 2;
                continue;
            }
            break;
        }
        *w++ = *q++;
    }
    /* w <= q: the closing quote (or a byte before it) becomes the NUL */
    char *after = q + 1;
    *w = '\0';
    *text = open + 1;
    *s = after;
    return RF_OK;
}

/* Splits s (the arguments of a directive, modified in place) into words,
 * quoted names and commas, up to the end or a '#' outside quotes. */
static rf_status tokenize(parser *p, char *s)
{
    p->ntok = 0;
    for (;;) {
        rf_status st;
        while (is_blank(*s))
            s++;
        if (*s == '\0' || *s == '#')
            return RF_OK;
        if (*s == ',') {
            if ((st = push(p, TOK_COMMA, ",")) != RF_OK)
                return st;
            s++;
            continue;
        }
        if (*s == '"') {
            const char *text;
            if ((st = read_quoted(p, &s, &text)) != RF_OK)
                return st;
            if (!(*s == '\0' || is_blank(*s) || *s == ',' || *s == '#'))
                return fail(p, "text follows a closing double quote at "
                            "column %d; put the whole name in the quotes",
                            (int)(s - p->linebase));
            if ((st = push(p, TOK_QUOTED, text)) != RF_OK)
                return st;
            continue;
        }
        char *start = s;
        while (*s && !is_blank(*s) && *s != ',' && *s != '#' && *s != '"')
            s++;
        char c = *s;
        if (c == '"')
            return fail(p, "a double quote inside a word (column %d); put "
                        "the whole name or path in double quotes",
                        (int)(s - p->linebase) + 1);
        *s = '\0';
        if ((st = push(p, TOK_WORD, start)) != RF_OK)
            return st;
        if (c == '\0' || c == '#')
            return RF_OK;
        if (c == ',' && (st = push(p, TOK_COMMA, ",")) != RF_OK)
            return st;
        s++;
    }
}

/* ---------------------------------------------------------- job helpers */

static char *dup(parser *p, const char *s)
{
    char *d = strdup(s);
    if (d == NULL)
        nomem(p);
    return d;
}

/* path against dir: absolute paths stay; "." adds nothing. NULL on no
 * memory. */
static char *resolve(const char *dir, const char *path)
{
    if (path[0] == '/' || strcmp(dir, ".") == 0)
        return strdup(path);
    size_t dl = strlen(dir), pl = strlen(path);
    int slash = dl > 0 && dir[dl - 1] == '/' ? 0 : 1;
    char *r = malloc(dl + (size_t)slash + pl + 1);
    if (r == NULL)
        return NULL;
    memcpy(r, dir, dl);
    if (slash)
        r[dl] = '/';
    memcpy(r + dl + (size_t)slash, path, pl + 1);
    return r;
}

static int is_name(const token *t)
{
    return t->kind == TOK_WORD || t->kind == TOK_QUOTED;
}

/* Exactly one name or word after the keyword; what says what it is. */
static rf_status one_arg(parser *p, const char *key, const char *what,
                         const char **out)
{
    if (p->ntok == 0)
        return fail(p, "%s needs %s", key, what);
    if (!is_name(&p->tok[0]))
        return fail(p, "%s needs %s, not ','", key, what);
    if (p->ntok > 1)
        return fail(p, "%s takes one value (%s); put a name with spaces in "
                    "double quotes, e.g. \"sale price\"", key, what);
    if (p->tok[0].kind == TOK_QUOTED && p->tok[0].text[0] == '\0')
        return fail(p, "%s needs %s; \"\" is empty", key, what);
    *out = p->tok[0].text;
    return RF_OK;
}

/* One of n words (case-insensitive); returns its index in *which. */
static rf_status one_choice(parser *p, const char *key,
                            const char *const *words, size_t n, int *which)
{
    char list[256] = "", hint[96];
    for (size_t i = 0; i < n; i++) {
        size_t l = strlen(list);
        snprintf(list + l, sizeof list - l, "%s%s",
                 i == 0 ? "" : i + 1 == n ? " or " : ", ", words[i]);
    }
    const char *w;
    rf_status st = one_arg(p, key, list, &w);
    if (st != RF_OK)
        return st;
    for (size_t i = 0; i < n; i++)
        if (same_word(w, words[i])) {
            *which = (int)i;
            return RF_OK;
        }
    return fail(p, "%s must be %s, not '%s'%s", key, list, w,
                suggest(hint, sizeof hint, w, words, n));
}

/* One number after the keyword. */
static rf_status one_number(parser *p, const char *key, const char *example,
                            double *v)
{
    const char *w;
    if (p->ntok == 3 && p->tok[1].kind == TOK_COMMA
        && is_digits(p->tok[0].text) && is_digits(p->tok[2].text))
        return fail(p, "%s takes one number; the decimal mark is a point: "
                    "write %s.%s", key, p->tok[0].text, p->tok[2].text);
    rf_status st = one_arg(p, key, "a number", &w);
    if (st != RF_OK)
        return st;
    if (!parse_number(w, v))
        return fail(p, "%s needs a number such as %s, not '%s'", key,
                    example, w);
    return RF_OK;
}

/* One whole number 0..max after the keyword. */
static rf_status one_count(parser *p, const char *key, unsigned long max,
                           unsigned long *v)
{
    const char *w;
    rf_status st = one_arg(p, key, "a whole number", &w);
    if (st != RF_OK)
        return st;
    if (!parse_count(w, max, v)) {
        if (is_digits(w))
            return fail(p, "%s %s is too large (at most %lu)", key, w, max);
        return fail(p, "%s needs a whole number written with digits, not "
                    "'%s'", key, w);
    }
    return RF_OK;
}

/* Where a name was first listed among inputs and categories, or 0. */
static int listed_line(const job *j, const char *name)
{
    for (size_t i = 0; i < j->n_inputs; i++)
        if (strcmp(j->inputs[i].name, name) == 0)
            return j->inputs[i].line;
    for (size_t i = 0; i < j->n_categories; i++)
        if (strcmp(j->categories[i].name, name) == 0)
            return j->categories[i].line;
    return 0;
}

/* `inputs` and `categories`: NAME {, NAME}; appends to *list. */
static rf_status name_list(parser *p, const char *key, job_name **list,
                           size_t *n)
{
    if (p->ntok == 0)
        return fail(p, "%s needs at least one column name", key);
    for (size_t i = 0; i < p->ntok; i++) {
        const token *t = &p->tok[i];
        int expect_name = i % 2 == 0;
        if (expect_name && t->kind == TOK_COMMA)
            return fail(p, "empty item in the list of %s (%s)", key,
                        i == 0 ? "a ',' before the first name"
                               : "two commas in a row");
        if (!expect_name && is_name(t))
            return fail(p, "'%s' and '%s' need a ',' between them; put a "
                        "name with spaces in double quotes, e.g. "
                        "\"%s %s\"", p->tok[i - 1].text, t->text,
                        p->tok[i - 1].text, t->text);
        if (!expect_name)
            continue;
        if (t->text[0] == '\0')
            return fail(p, "empty name \"\" in the list of %s", key);
        int first = listed_line(p->j, t->text);
        if (first == p->line)
            return fail(p, "'%s' is listed twice on this line", t->text);
        if (first)
            return fail(p, "'%s' is listed twice (lines %d and %d)",
                        t->text, first, p->line);
        job_name *grown = realloc(*list, (*n + 1) * sizeof *grown);
        if (grown == NULL)
            return nomem(p);
        *list = grown;
        grown[*n].line = p->line;
        if ((grown[*n].name = dup(p, t->text)) == NULL)
            return RF_ENOMEM;
        (*n)++;
    }
    if (p->tok[p->ntok - 1].kind == TOK_COMMA)
        return fail(p, "empty item in the list of %s (a ',' after the last "
                    "name)", key);
    return RF_OK;
}

/* The delimiter argument: one character, or comma / semicolon / tab. */
static rf_status delimiter_value(parser *p, const token *t, char *out)
{
    if (t->kind == TOK_COMMA) {
        *out = ',';
        return RF_OK;
    }
    const char *w = t->text;
    if (same_word(w, "comma")) { *out = ','; return RF_OK; }
    if (same_word(w, "semicolon")) { *out = ';'; return RF_OK; }
    if (same_word(w, "tab") || strcmp(w, "\\t") == 0) {
        *out = '\t';
        return RF_OK;
    }
    unsigned char c = (unsigned char)w[0];
    if (c == 0 || w[1] != '\0')
        return fail(p, "delimiter must be one character, or comma, "
                    "semicolon or tab, not '%s'", w);
    if (c == '"' || c == '.' || c == ' ' || c >= 0x80
        || (c < 0x20 && c != '\t')
        || (c >= '0' && c <= '9') || (c >= 'a' && c <= 'z')
        || (c >= 'A' && c <= 'Z'))
        return fail(p, "'%s' cannot be a delimiter: it can be part of a "
                    "value; use comma, semicolon, tab or a sign such as "
                    "'|'", w);
    *out = (char)c;
    return RF_OK;
}

/* `data` and `score`: PATH [sheet S] [header N] [delimiter C]. */
static rf_status table_directive(parser *p, const char *key, job_table *t)
{
    static const char *const options[] = {"sheet", "header", "delimiter"};
    char hint[96];
    if (p->ntok == 0 || !is_name(&p->tok[0]))
        return fail(p, "%s needs a file path", key);
    if (p->tok[0].text[0] == '\0')
        return fail(p, "%s needs a file path; \"\" is empty", key);
    if ((t->path = dup(p, p->tok[0].text)) == NULL)
        return RF_ENOMEM;
    if ((t->resolved = resolve(p->j->dir, t->path)) == NULL)
        return nomem(p);
    t->line = p->line;
    int given[3] = {0, 0, 0};
    for (size_t i = 1; i < p->ntok; i += 2) {
        const token *o = &p->tok[i];
        if (o->kind == TOK_COMMA)
            return fail(p, "unexpected ',' after the %s path; options are "
                        "sheet, header and delimiter", key);
        int which = -1;
        for (int k = 0; k < 3; k++)
            if (same_word(o->text, options[k]))
                which = k;
        if (which < 0) {
            if (i == 1 && o->kind == TOK_WORD
                && job_nearest(o->text, options, 3) == NULL)
                return fail(p, "unexpected '%s' after the %s path; put a "
                            "path with spaces in double quotes, e.g. "
                            "\"%s %s\"", o->text, key, t->path, o->text);
            return fail(p, "unknown %s option '%s'%s; options are sheet, "
                        "header and delimiter", key, o->text,
                        suggest(hint, sizeof hint, o->text, options, 3));
        }
        if (given[which])
            return fail(p, "%s given twice on this line", options[which]);
        given[which] = 1;
        if (i + 1 >= p->ntok)
            return fail(p, "%s needs a value", options[which]);
        const token *v = &p->tok[i + 1];
        if (which == 2) {
            rf_status st = delimiter_value(p, v, &t->delimiter);
            if (st != RF_OK)
                return st;
            continue;
        }
        if (v->kind == TOK_COMMA)
            return fail(p, "%s needs a value, not ','", options[which]);
        if (which == 0) {
            unsigned long k;
            if (v->text[0] == '\0')
                return fail(p, "sheet needs a sheet name or number");
            if (is_digits(v->text)
                && (!parse_count(v->text, 1000000, &k) || k == 0))
                return fail(p, "sheet number %s does not exist: sheets are "
                            "numbered from 1", v->text);
            if ((t->sheet = dup(p, v->text)) == NULL)
                return RF_ENOMEM;
        } else {
            unsigned long k;
            if (!parse_count(v->text, JOB_HEADER_MAX, &k) || k < 1)
                return fail(p, "header must be a row number from 1 to %d, "
                            "not '%s'", JOB_HEADER_MAX, v->text);
            t->header = (int)k;
        }
    }
    return RF_OK;
}

/* The formula after '=' at s, in place: a comment outside quotes cut (both
 * quote kinds protect '#', since a formula has 'text' and "a name"), then
 * trimmed. *out points into s. */
static rf_status formula_text(parser *p, char *s, char **out)
{
    char *q = s;
    int dq = 0, sq = 0;
    for (; *q; q++) {
        if (dq) { if (*q == '"') dq = 0; continue; }
        if (sq) { if (*q == '\'') sq = 0; continue; }
        if (*q == '"') dq = 1;
        else if (*q == '\'') sq = 1;
        else if (*q == '#') break;
    }
    if (dq || sq)
        return fail(p, "unterminated %s quote in the formula",
                    dq ? "double" : "single");
    *q = '\0';
    while (is_blank(*s))
        s++;
    size_t n = strlen(s);
    while (n > 0 && is_blank(s[n - 1]))
        s[--n] = '\0';
    *out = s;
    return RF_OK;
}

/* `derive NAME = FORMULA`, read from the raw text after the keyword, since
 * the formula keeps its own quoting. */
static rf_status derive_directive(parser *p, char *s)
{
    static const char *usage = "derive NAME = FORMULA";
    job *j = p->j;
    rf_status st;
    while (is_blank(*s))
        s++;
    const char *name;
    if (*s == '"') {
        if ((st = read_quoted(p, &s, &name)) != RF_OK)
            return st;
    } else {
        char *start = s;
        while (*s && !is_blank(*s) && *s != '=' && *s != '#' && *s != '"')
            s++;
        if (*s == '"')
            return fail(p, "a double quote inside the derive name; put the "
                        "whole name in double quotes");
        if (s == start)
            return fail(p, "derive needs a name: %s", usage);
        /* Shift the name one byte left over the blank before it, so it can
         * be NUL-terminated without losing the '=' that may follow. */
        memmove(start - 1, start, (size_t)(s - start));
        s[-1] = '\0';
        name = start - 1;
    }
    if (name[0] == '\0')
        return fail(p, "derive needs a name; \"\" is empty");
    while (is_blank(*s))
        s++;
    if (*s != '=')
        return fail(p, "derive needs '=' between the name and the formula: "
                    "%s", usage);
    char *f = NULL;
    if ((st = formula_text(p, s + 1, &f)) != RF_OK)
        return st;
    if (f[0] == '\0')
        return fail(p, "derive '%s' has no formula after '='", name);
    for (size_t i = 0; i < j->n_derives; i++)
        if (strcmp(j->derives[i].name, name) == 0)
            return fail(p, "derive '%s' is defined twice (lines %d and %d)",
                        name, j->derives[i].line, p->line);
    job_derive *g = realloc(j->derives, (j->n_derives + 1) * sizeof *g);
    if (g == NULL)
        return nomem(p);
    j->derives = g;
    job_derive *d = &g[j->n_derives];
    d->line = p->line;
    d->name = dup(p, name);
    d->formula = d->name ? dup(p, f) : NULL;
    if (d->formula == NULL) {
        free(d->name);
        return RF_ENOMEM;
    }
    j->n_derives++;
    return RF_OK;
}

/* `report ratio-study` | `report selection-rates by COLUMN` */
static rf_status report_directive(parser *p)
{
    static const char *const kinds[] = {"ratio-study", "selection-rates"};
    job *j = p->j;
    char hint[96];
    if (p->ntok == 0 || !is_name(&p->tok[0]))
        return fail(p, "report needs a kind: ratio-study or "
                    "selection-rates by COLUMN");
    const char *k = p->tok[0].text;
    int which = same_word(k, kinds[0]) ? 0 : same_word(k, kinds[1]) ? 1 : -1;
    if (which < 0)
        return fail(p, "unknown report '%s'%s; reports are ratio-study and "
                    "selection-rates by COLUMN", k,
                    suggest(hint, sizeof hint, k, kinds, 2));
    const char *by = NULL;
    if (which == 0 && p->ntok > 1)
        return fail(p, "report ratio-study takes nothing after it");
    if (which == 1) {
        if (p->ntok < 3 || !is_name(&p->tok[1])
            || !same_word(p->tok[1].text, "by") || !is_name(&p->tok[2])
            || p->tok[2].text[0] == '\0')
            return fail(p, "write report selection-rates by COLUMN");
        if (p->ntok > 3)
            return fail(p, "report selection-rates takes one column after "
                        "'by'; put a name with spaces in double quotes");
        by = p->tok[2].text;
    }
    for (size_t i = 0; i < j->n_reports; i++)
        if (strcmp(j->reports[i].kind, kinds[which]) == 0)
            return fail(p, "report %s is asked for twice (lines %d and %d)",
                        kinds[which], j->reports[i].line, p->line);
    job_report *g = realloc(j->reports, (j->n_reports + 1) * sizeof *g);
    if (g == NULL)
        return nomem(p);
    j->reports = g;
    job_report *r = &g[j->n_reports];
    r->line = p->line;
    r->by = NULL;
    if ((r->kind = dup(p, kinds[which])) == NULL)
        return RF_ENOMEM;
    if (by && (r->by = dup(p, by)) == NULL) {
        free(r->kind);
        return RF_ENOMEM;
    }
    j->n_reports++;
    return RF_OK;
}

/* `hidden N[, N]`: units per hidden layer. */
static rf_status hidden_directive(parser *p)
{
    job *j = p->j;
    if (p->ntok == 0)
        return fail(p, "hidden needs the units of each hidden layer, e.g. "
                    "hidden 8 or hidden 16, 8");
    int n = 0;
    for (size_t i = 0; i < p->ntok; i++) {
        const token *t = &p->tok[i];
        if (i % 2 == 1) {
            if (t->kind != TOK_COMMA)
                return fail(p, "hidden: separate the layers with ',', e.g. "
                            "hidden 16, 8");
            continue;
        }
        if (t->kind == TOK_COMMA)
            return fail(p, "hidden: empty item in the list of layers");
        if (n == JOB_HIDDEN_MAX)
            return fail(p, "hidden: at most %d layers", JOB_HIDDEN_MAX);
        unsigned long u;
        if (!parse_count(t->text, JOB_UNITS_MAX, &u) || u < 1)
            return fail(p, "hidden: a layer has 1 to %d units, not '%s'",
                        JOB_UNITS_MAX, t->text);
        j->hidden[n++] = (int)u;
    }
    if (p->tok[p->ntok - 1].kind == TOK_COMMA)
        return fail(p, "hidden: empty item in the list of layers (a ',' "
                    "after the last)");
    j->n_hidden = n;
    j->hidden_line = p->line;
    return RF_OK;
}

static rf_status set_name(parser *p, const char *key, const char *what,
                          job_name *out)
{
    const char *w;
    rf_status st = one_arg(p, key, what, &w);
    if (st != RF_OK)
        return st;
    if ((out->name = dup(p, w)) == NULL)
        return RF_ENOMEM;
    out->line = p->line;
    return RF_OK;
}

static int ends_with_xlsx(const char *s)
{
    size_t n = strlen(s);
    return n > 5 && same_word(s + n - 5, ".xlsx");
}

/* One directive whose arguments are tokenized. */
static rf_status directive(parser *p, kw k)
{
    static const char *const models[] = {"linear", "logistic", "network"};
    static const char *const missing[] = {"skip", "stop"};
    static const char *const yesno[] = {"yes", "no"};
    static const char *const solvers[] = {"exact", "gradient", "lbfgs",
                                          "adam"};
    job *j = p->j;
    const char *key = keywords[k].name;
    const char *w;
    double v;
    unsigned long u;
    int which;
    rf_status st = RF_OK;

    switch (k) {
    case KW_JOB:
        if ((st = one_arg(p, key, "a name", &w)) != RF_OK)
            return st;
        if (strchr(w, '/') || strchr(w, '\\'))
            return fail(p, "the job name '%s' cannot contain '/' or '\\': "
                        "it names the result file", w);
        free(j->name);
        if ((j->name = dup(p, w)) == NULL)
            return RF_ENOMEM;
        j->name_line = p->line;
        return RF_OK;
    case KW_DATA:
        return table_directive(p, key, &j->data);
    case KW_SCORE:
        return table_directive(p, key, &j->score);
    case KW_TARGET:
        return set_name(p, key, "the column to estimate", &j->target);
    case KW_INPUTS:
        return name_list(p, key, &j->inputs, &j->n_inputs);
    case KW_CATEGORIES:
        return name_list(p, key, &j->categories, &j->n_categories);
    case KW_ID:
        return set_name(p, key, "a column name", &j->id);
    case KW_MODEL:
        if ((st = one_choice(p, key, models, 3, &which)) != RF_OK)
            return st;
        j->model = (job_model)(MODEL_LINEAR + which);
        j->model_line = p->line;
        return RF_OK;
    case KW_OUTPUT:
        if ((st = one_arg(p, key, "a file path", &w)) != RF_OK)
            return st;
        if (!ends_with_xlsx(w))
            return fail(p, "output must name an .xlsx file, not '%s'", w);
        if ((j->output = dup(p, w)) == NULL)
            return RF_ENOMEM;
        j->output_line = p->line;
        return RF_OK;
    case KW_MISSING:
        if ((st = one_choice(p, key, missing, 2, &which)) != RF_OK)
            return st;
        j->missing = which ? MISSING_STOP : MISSING_SKIP;
        return RF_OK;
    case KW_INTERCEPT:
        if ((st = one_choice(p, key, yesno, 2, &which)) != RF_OK)
            return st;
        j->intercept = which == 0;
        return RF_OK;
    case KW_RIDGE:
        j->ridge_line = p->line;
        if (p->ntok == 1 && is_name(&p->tok[0])
            && same_word(p->tok[0].text, "auto")) {
            j->ridge_auto = 1;
            return RF_OK;
        }
        if ((st = one_number(p, key, "0.5 (or auto)", &v)) != RF_OK)
            return st;
        if (!(v >= 0))
            return fail(p, "ridge must be 0 or more (or auto), not %s",
                        p->tok[0].text);
        j->ridge = v;
        return RF_OK;
    case KW_POSITIVE:
        if ((st = one_arg(p, key, "the target value that counts as the "
                          "event", &w)) != RF_OK)
            return st;
        if ((j->positive = dup(p, w)) == NULL)
            return RF_ENOMEM;
        j->positive_line = p->line;
        return RF_OK;
    case KW_THRESHOLD:
    case KW_LEVEL:
        if ((st = one_number(p, key, k == KW_LEVEL ? "0.95" : "0.5", &v))
            != RF_OK)
            return st;
        if (!(v > 0 && v < 1))
            return fail(p, "%s must be between 0 and 1 (both excluded), "
                        "not %s%s", key, p->tok[0].text,
                        v > 1 && v < 100 ? "; write a percentage as a "
                        "fraction, e.g. 0.95 for 95%" : "");
        if (k == KW_LEVEL) { j->level = v; j->level_line = p->line; }
        else { j->threshold = v; j->threshold_line = p->line; }
        return RF_OK;
    case KW_FOLDS:
        if ((st = one_count(p, key, JOB_FOLDS_MAX, &u)) != RF_OK)
            return st;
        if (u == 1)
            return fail(p, "folds must be 0 (off) or from 2 to %d, not 1",
                        JOB_FOLDS_MAX);
        j->folds = (int)u;
        j->folds_line = p->line;
        return RF_OK;
    case KW_SEED:
        /* the generator (GSL's mt19937) keeps 32 bits of its seed: a
         * larger one would silently repeat a smaller one's folds */
        if ((st = one_count(p, key, 4294967295UL, &u)) != RF_OK)
            return st;
        j->seed = u;
        return RF_OK;
    case KW_HIDDEN:
        return hidden_directive(p);
    case KW_SOLVER:
        if ((st = one_choice(p, key, solvers, 4, &which)) != RF_OK)
            return st;
        j->solver = (job_solver)(SOLVER_EXACT + which);
        j->solver_line = p->line;
        return RF_OK;
    case KW_RATE:
        if ((st = one_number(p, key, "0.01", &v)) != RF_OK)
            return st;
        if (!(v > 0))
            return fail(p, "rate must be more than 0, not %s",
                        p->tok[0].text);
        j->rate = v;
        j->rate_line = p->line;
        return RF_OK;
    case KW_EPOCHS:
        if ((st = one_count(p, key, (unsigned long)0x7fffffffL, &u))
            != RF_OK)
            return st;
        if (u < 1)
            return fail(p, "epochs must be 1 or more");
        j->epochs = (long)u;
        j->epochs_line = p->line;
        return RF_OK;
    case KW_RESTARTS:
        if ((st = one_count(p, key, JOB_RESTARTS_MAX, &u)) != RF_OK)
            return st;
        if (u < 1)
            return fail(p, "restarts must be from 1 to %d",
                        JOB_RESTARTS_MAX);
        j->restarts = (int)u;
        j->restarts_line = p->line;
        return RF_OK;
    case KW_REPORT:
        return report_directive(p);
    case KW_DERIVE:
    case KW_COUNT:
        break;
    }
    return RF_OK;  /* not reached: derive is read raw, KW_COUNT is no kw */
}

/* One line of the job (modified in place). */
static rf_status parse_line(parser *p, char *s)
{
    int bad = utf8_bad_column(s);
    if (bad)
        return fail(p, "not valid UTF-8 at column %d; save the job file as "
                    "UTF-8 text", bad);
    while (is_blank(*s))
        s++;
    if (*s == '\0' || *s == '#')
        return RF_OK;
    char *kstart = s;
    while (*s && !is_blank(*s) && *s != '#' && *s != '"' && *s != ',')
        s++;
    if (s == kstart)
        return fail(p, "a line starts with a keyword, not '%c'", *kstart);
    char c = *s;
    *s = '\0';
    int k = -1;
    for (int i = 0; i < KW_COUNT; i++)
        if (same_word(kstart, keywords[i].name))
            k = i;
    if (k < 0) {
        const char *names[KW_COUNT];
        char hint[96];
        for (int i = 0; i < KW_COUNT; i++)
            names[i] = keywords[i].name;
        return fail(p, "unknown keyword '%s'%s", kstart,
                    suggest(hint, sizeof hint, kstart, names, KW_COUNT));
    }
    *s = c;
    if (keywords[k].once && p->seen[k])
        return fail(p, "%s is given twice; the first is at line %d",
                    keywords[k].name, p->seen[k]);
    if (!p->seen[k])
        p->seen[k] = p->line;
    if (k == KW_DERIVE)
        return derive_directive(p, s);
    rf_status st = tokenize(p, s);
    if (st != RF_OK)
        return st;
    return directive(p, (kw)k);
}

/* ------------------------------------------------ checks after all lines */

/* Directives that do not apply to the chosen model. Returns the line of
 * the first, with its message in msg, or 0 when all apply. */
static int job_misapplied(const job *j, char *msg, size_t len)
{
    if (j->model == MODEL_LINEAR && j->positive_line) {
        snprintf(msg, len, "positive applies to yes/no targets: model "
                 "logistic or network");
        return j->positive_line;
    }
    if (j->model == MODEL_LINEAR && j->threshold_line) {
        snprintf(msg, len, "threshold applies to yes/no targets: model "
                 "logistic or network");
        return j->threshold_line;
    }
    if (j->model == MODEL_NETWORK && j->ridge_auto) {
        snprintf(msg, len, "ridge auto applies to model linear or logistic: "
                 "give a network a fixed weight decay, `ridge VALUE`");
        return j->ridge_line;
    }
    if (j->model != MODEL_NETWORK && j->hidden_line) {
        snprintf(msg, len, "hidden applies to model network only");
        return j->hidden_line;
    }
    if (j->model != MODEL_NETWORK && j->restarts_line) {
        snprintf(msg, len, "restarts applies to model network only");
        return j->restarts_line;
    }
    int network_solver = j->solver == SOLVER_LBFGS || j->solver == SOLVER_ADAM;
    if (j->solver_line && network_solver != (j->model == MODEL_NETWORK)) {
        snprintf(msg, len, "solver %s applies to %s only",
                 network_solver ? (j->solver == SOLVER_LBFGS ? "lbfgs"
                                                             : "adam")
                                : (j->solver == SOLVER_EXACT ? "exact"
                                                             : "gradient"),
                 network_solver ? "model network"
                                : "models linear and logistic");
        return j->solver_line;
    }
    /* rate and epochs steer an iterative fit; exact has none */
    int iterative = j->model == MODEL_NETWORK || j->solver == SOLVER_GRADIENT;
    if (!iterative && j->rate_line) {
        snprintf(msg, len, "rate applies to solver gradient or model "
                 "network only");
        return j->rate_line;
    }
    if (!iterative && j->epochs_line) {
        snprintf(msg, len, "epochs applies to solver gradient or model "
                 "network only");
        return j->epochs_line;
    }
    return 0;
}

/*
 * NOT AVAILABLE YET. Everything the job language accepts but this version
 * cannot run. Checked last, once the job is otherwise valid, so a user sees
 * real mistakes first. When a feature arrives, delete its entry here (and
 * its line in docs/job-file.md). Returns the directive's line with a short
 * description in what, or 0 when the job uses none of these.
 */
static int job_unavailable(const job *j, char *what, size_t len)
{
    if (j->n_reports > 0) {
        snprintf(what, len, "report %s", j->reports[0].kind);
        return j->reports[0].line;
    }
    return 0;
}

/* Required directives, defaults that depend on others, then the checks
 * that need the whole job. last is the file's last line, where a missing
 * directive is reported (it would go there). */
static rf_status finish(parser *p, int last)
{
    job *j = p->j;
    if (last < 1)
        last = 1;
    if (j->data.path == NULL)
        return fail_at(p, last, "no data: add a line `data PATH` naming "
                       "the table to learn from");
    if (j->target.name == NULL)
        return fail_at(p, last, "no target: add a line `target COLUMN` "
                       "naming the column to estimate");
    if (j->model == MODEL_NONE)
        return fail_at(p, last, "no model: add a line `model linear`");
    if (j->n_inputs == 0 && j->n_categories == 0)
        return fail_at(p, last, "no inputs: add a line `inputs COLUMN, "
                       "...` (or `categories COLUMN, ...`)");

    if (j->model == MODEL_NETWORK && j->n_hidden == 0) {
        j->hidden[0] = JOB_HIDDEN_DEFAULT;
        j->n_hidden = 1;
    }
    if (j->output) {
        j->output_resolved = resolve(j->dir, j->output);
    } else {
        size_t n = strlen(j->name) + sizeof "-results.xlsx";
        char *base = malloc(n);
        if (base == NULL)
            return nomem(p);
        snprintf(base, n, "%s-results.xlsx", j->name);
        j->output_resolved = resolve(j->dir, base);
        free(base);
    }
    if (j->output_resolved == NULL)
        return nomem(p);

    char msg[160];
    int line = job_misapplied(j, msg, sizeof msg);
    if (line)
        return fail_at(p, line, "%s", msg);
    line = job_unavailable(j, msg, sizeof msg);
    if (line)
        return fail_at(p, line, "%s is not available yet in this version "
                       "of rowfit", msg);
    return RF_OK;
}

/* ------------------------------------------------------------ public API */

/* The folder of path ("." when it has none) and its base name without the
 * extension. NULL fields on no memory. */
static void split_path(const char *path, char **dir, char **name)
{
    const char *slash = strrchr(path, '/');
    const char *base = slash ? slash + 1 : path;
    if (slash == NULL) {
        *dir = strdup(".");
    } else if (slash == path) {
        *dir = strdup("/");
    } else {
        size_t n = (size_t)(slash - path);
        *dir = malloc(n + 1);
        if (*dir) {
            memcpy(*dir, path, n);
            (*dir)[n] = '\0';
        }
    }
    const char *dot = strrchr(base, '.');
    size_t n = dot && dot != base ? (size_t)(dot - base) : strlen(base);
    if (n == 0) {
        base = "job";
        n = 3;
    }
    *name = malloc(n + 1);
    if (*name) {
        memcpy(*name, base, n);
        (*name)[n] = '\0';
    }
}

rf_status job_parse(const char *text, const char *path, job **out,
                    rf_error *err)
{
    *out = NULL;
    if (path == NULL)
        path = "job";
    job *j = calloc(1, sizeof *j);
    parser p;
    memset(&p, 0, sizeof p);
    p.j = j;
    p.path = path;
    p.err = err;
    char *buf = NULL;
    rf_status st = RF_OK;
    if (j == NULL)
        return error_nomem(err, path);

    /* a UTF-8 byte-order mark is allowed and ignored (RFC 3629 sec. 6) */
    if (strncmp(text, "\xEF\xBB\xBF", 3) == 0)
        text += 3;
    j->intercept = 1;
    j->level = 0.95;
    j->threshold = 0.5;
    j->seed = 1;
    j->folds = -1;
    j->restarts = 1;
    j->missing = MISSING_SKIP;
    j->file = strdup(path);
    j->text = strdup(text);
    buf = strdup(text);
    split_path(path, &j->dir, &j->name);
    if (!j->file || !j->text || !buf || !j->dir || !j->name) {
        st = error_nomem(err, path);
        goto done;
    }

    char *s = buf;
    int line = 0;
    while (*s) {
        char *nl = strchr(s, '\n');
        if (nl)
            *nl = '\0';
        p.line = ++line;
        p.linebase = s;
        if ((st = parse_line(&p, s)) != RF_OK)
            goto done;
        if (nl == NULL)
            break;
        s = nl + 1;
    }
    st = finish(&p, line);

done:
    free(buf);
    free(p.tok);
    if (st != RF_OK) {
        job_free(j);
        return st;
    }
    *out = j;
    return RF_OK;
}

rf_status job_read(const char *path, job **out, rf_error *err)
{
    *out = NULL;
    FILE *f = fopen(path, "rb");
    /* A job file that is not there is the user's mistake (exit 1); one
     * that is there but cannot be read is the system's (exit 3). */
    if (f == NULL && errno == ENOENT)
        return error_set(err, RF_EINPUT, path, "no such job file");
    if (f == NULL)
        return error_set(err, RF_ESYSTEM, path, "cannot open the job file: "
                         "%s", strerror(errno));
    char *text = malloc((size_t)JOB_FILE_MAX + 1);
    if (text == NULL) {
        fclose(f);
        return error_nomem(err, path);
    }
    size_t n = fread(text, 1, (size_t)JOB_FILE_MAX + 1, f);
    int failed = ferror(f);
    int saved = errno;
    fclose(f);
    if (failed) {
        free(text);
        if (saved == EISDIR)
            return error_set(err, RF_EINPUT, path,
                             "is a folder, not a job file");
        return error_set(err, RF_ESYSTEM, path, "cannot read the job file: "
                         "%s", strerror(saved));
    }
    if (n > (size_t)JOB_FILE_MAX) {
        free(text);
        return error_set(err, RF_EINPUT, path, "larger than %ld bytes: not "
                         "a job file", (long)JOB_FILE_MAX);
    }
    text[n] = '\0';
    const char *nul = memchr(text, '\0', n);
    if (nul) {
        int line = 1;
        for (const char *c = text; c < nul; c++)
            line += *c == '\n';
        char where[ERROR_WHERE_MAX];
        snprintf(where, sizeof where, "%s:%d", path, line);
        free(text);
        return error_set(err, RF_EINPUT, where, "contains a NUL byte: not "
                         "a text file");
    }
    rf_status st = job_parse(text, path, out, err);
    free(text);
    return st;
}

static void free_table(job_table *t)
{
    free(t->path);
    free(t->resolved);
    free(t->sheet);
}

void job_free(job *j)
{
    if (j == NULL)
        return;
    free(j->file);
    free(j->dir);
    free(j->text);
    free(j->name);
    free_table(&j->data);
    free_table(&j->score);
    free(j->target.name);
    for (size_t i = 0; i < j->n_inputs; i++)
        free(j->inputs[i].name);
    free(j->inputs);
    for (size_t i = 0; i < j->n_categories; i++)
        free(j->categories[i].name);
    free(j->categories);
    for (size_t i = 0; i < j->n_derives; i++) {
        free(j->derives[i].name);
        free(j->derives[i].formula);
    }
    free(j->derives);
    free(j->id.name);
    free(j->output);
    free(j->output_resolved);
    free(j->positive);
    for (size_t i = 0; i < j->n_reports; i++) {
        free(j->reports[i].kind);
        free(j->reports[i].by);
    }
    free(j->reports);
    free(j);
}

const char *job_model_name(job_model m)
{
    switch (m) {
    case MODEL_NONE:     return "none";
    case MODEL_LINEAR:   return "linear";
    case MODEL_LOGISTIC: return "logistic";
    case MODEL_NETWORK:  return "network";
    }
    return "none";
}
