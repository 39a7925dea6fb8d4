/*
 * formula.c: the `derive` formula language (see formula.h). Source text is
 * cut into tokens, then a recursive-descent parser compiles the tokens into
 * a small postfix program that formula_eval runs once per row with a fixed
 * value stack; IF compiles to jumps so only the chosen branch is evaluated.
 * The token list is kept so the formula can be printed back for a workbook.
 * Not a spreadsheet engine: no cell ranges, no text functions, no dates
 * other than YEAR/MONTH/DAY of a serial day.
 */
#include "formula.h"

#include <assert.h>
#include <errno.h>
#include <locale.h>
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>

#include "../io/table.h"

/* ---- functions ---------------------------------------------------------- */

enum fn_id { FN_LN, FN_LOG10, FN_EXP, FN_SQRT, FN_ABS, FN_MIN, FN_MAX,
             FN_ROUND, FN_IF, FN_YEAR, FN_MONTH, FN_DAY, FN_COUNT };

/* Names as OpenFormula spells them, so the printed formula is live in a
 * workbook. max_args 0 means "no upper limit". */
static const struct fn_info {
    const char *name;
    int min_args, max_args;
} fns[FN_COUNT] = {
    [FN_LN] = {"LN", 1, 1},       [FN_LOG10] = {"LOG10", 1, 1},
    [FN_EXP] = {"EXP", 1, 1},     [FN_SQRT] = {"SQRT", 1, 1},
    [FN_ABS] = {"ABS", 1, 1},     [FN_MIN] = {"MIN", 1, 0},
    [FN_MAX] = {"MAX", 1, 0},     [FN_ROUND] = {"ROUND", 1, 2},
    [FN_IF] = {"IF", 2, 3},       [FN_YEAR] = {"YEAR", 1, 1},
    [FN_MONTH] = {"MONTH", 1, 1}, [FN_DAY] = {"DAY", 1, 1},
};

/* ---- tokens ------------------------------------------------------------- */

enum tok_kind { T_END, T_NUM, T_TEXT, T_NAME, T_LPAREN, T_RPAREN, T_COMMA,
                T_OP };

/* Operators; also the opcodes of the binary instructions. */
enum op_id { OP_ADD, OP_SUB, OP_MUL, OP_DIV, OP_POW, OP_EQ, OP_NE, OP_LT,
             OP_LE, OP_GT, OP_GE, OP_COUNT };

static const char *const op_text[OP_COUNT] = {
    "+", "-", "*", "/", "^", "=", "<>", "<", "<=", ">", ">="};

typedef struct token {
    enum tok_kind kind;
    size_t pos, len;    /* bytes of the source */
    double num;         /* T_NUM */
    char *s;            /* T_TEXT, T_NAME: decoded text, owned */
    int quoted;         /* T_NAME written in double quotes */
    int op;             /* T_OP: enum op_id */
    int fn;             /* T_NAME used as a function: enum fn_id, else -1 */
    int ref;            /* T_NAME used as a column: its ref index, else -1 */
    int add_zero;       /* T_RPAREN closing ROUND(x) or IF(c, a): print ",0"
                           first, since a workbook may require the argument */
} token;

/* ---- program ------------------------------------------------------------ */

enum code_op { C_NUM = OP_COUNT, C_TEXT, C_REF, C_NEG, C_CALL, C_JFALSE,
               C_JUMP };

typedef struct instr {
    int op;       /* enum op_id (binary) or enum code_op */
    int arg;      /* C_TEXT: token; C_REF: ref; C_CALL: fn; jumps: target */
    int nargs;    /* C_CALL */
    double num;   /* C_NUM */
} instr;

struct formula {
    token *toks;  size_t ntoks;
    instr *code;  size_t ncode, capcode;
    const char **refs;  size_t nrefs;  /* borrowed from toks[].s */
};

/* ---- numbers, locale-independent ---------------------------------------- */

/* strtod and printf follow LC_NUMERIC; formulas always use '.', so the
 * locale's decimal point is swapped in before reading and out after writing. */
static const char *locale_point(void)
{
    const char *p = localeconv()->decimal_point;
    return (p && *p) ? p : ".";
}

/* Reads a number written with '.' (no sign). Returns 0, -1 when it is out
 * of range, or -2 when it is too long to be a sensible number. */
static int read_number(const char *s, size_t len, double *out)
{
    char buf[400];
    const char *dp = locale_point();
    size_t dpl = strlen(dp), k = 0;
    for (size_t i = 0; i < len; i++) {
        if (s[i] == '.') {
            if (k + dpl >= sizeof buf)
                return -2;
            memcpy(buf + k, dp, dpl);
            k += dpl;
        } else {
            if (k + 1 >= sizeof buf)
                return -2;
            buf[k++] = s[i];
        }
    }
    buf[k] = '\0';
    errno = 0;
    char *end;
    double v = strtod(buf, &end);
    if (*end != '\0' || !isfinite(v) || (errno == ERANGE && fabs(v) > 1))
        return -1;
    *out = v;
    return 0;
}

/* Rewrites the locale's decimal point in buf as '.'. */
static void point_to_dot(char *buf)
{
    const char *dp = locale_point();
    size_t dpl = strlen(dp);
    if (dpl == 1 && dp[0] == '.')
        return;
    char *p = strstr(buf, dp);
    if (p) {
        *p = '.';
        memmove(p + 1, p + dpl, strlen(p + dpl) + 1);
    }
}

/* The fewest significant digits (at most 17, which always suffice for a
 * double: IEEE 754-2008 section 5.12.2) that read back as exactly v,
 * written plainly ("2020", "0.001") for exponents -5..14 as a user would,
 * otherwise in E notation ("1E+20"). */
static void format_roundtrip(double v, char *buf, size_t n)
{
    assert(v >= 0 && isfinite(v));  /* literals carry no sign */
    for (int prec = 1; prec <= 17; prec++) {
        snprintf(buf, n, "%.*E", prec - 1, v);
        int x = atoi(strchr(buf, 'E') + 1);  /* after rounding to prec */
        if (x >= -5 && x < 15)
            snprintf(buf, n, "%.*f", prec - 1 - x > 0 ? prec - 1 - x : 0, v);
        else
            snprintf(buf, n, "%.*G", prec, v);
        point_to_dot(buf);
        double back;
        if (read_number(buf, strlen(buf), &back) == 0 && back == v)
            return;
    }
}

/* A value for messages: 15 significant digits, the precision spreadsheets
 * show, so "LN of -3" rather than "LN of -3.0000000000000000". */
static const char *show_num(double v, char *buf, size_t n)
{
    snprintf(buf, n, "%.15g", v);
    point_to_dot(buf);
    return buf;
}

/* ---- errors ------------------------------------------------------------- */

/* 1-based character column of byte pos in src (UTF-8 continuation bytes do
 * not count), so the number matches what an editor shows. */
static size_t column_of(const char *src, size_t pos)
{
    size_t col = 1;
    for (size_t i = 0; i < pos && src[i]; i++)
        if (((unsigned char)src[i] & 0xC0) != 0x80)
            col++;
    return col;
}

typedef struct parser {
    const char *src;
    const char *where;
    rf_error *err;
    formula *f;
    size_t at;       /* current token */
    int depth;       /* recursion depth, capped at FORMULA_DEPTH_MAX */
    int height;      /* values on the stack at this point of the program */
} parser;

static rf_status perr(parser *p, const char *fmt, ...)
    __attribute__((format(printf, 2, 3)));

static rf_status perr(parser *p, const char *fmt, ...)
{
    char msg[ERROR_MESSAGE_MAX];
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(msg, sizeof msg, fmt, ap);
    va_end(ap);
    return error_set(p->err, RF_EINPUT, p->where, "%s", msg);
}

/* Describes a token for a message: "')'", "name 'b'", "the end of the
 * formula". Long source text is cut so the message stays readable. */
static const char *describe(const parser *p, const token *t, char *buf,
                            size_t n)
{
    int len = t->len > 40 ? 40 : (int)t->len;
    const char *s = p->src + t->pos;
    switch (t->kind) {
    case T_END:  snprintf(buf, n, "the end of the formula"); break;
    case T_NUM:  snprintf(buf, n, "number %.*s", len, s); break;
    case T_TEXT: snprintf(buf, n, "text %.*s", len, s); break;
    case T_NAME: snprintf(buf, n, "name %s%.*s%s", t->quoted ? "" : "'",
                          len, s, t->quoted ? "" : "'"); break;
    default:     snprintf(buf, n, "'%.*s'", len, s); break;
    }
    return buf;
}

/* ---- lexer -------------------------------------------------------------- */

static int is_name_start(unsigned char c)
{
    /* Bytes >= 0x80 are parts of UTF-8 letters: names like größe work bare. */
    return (c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z') || c == '_'
           || c >= 0x80;
}

static int is_name_char(unsigned char c)
{
    return is_name_start(c) || (c >= '0' && c <= '9') || c == '.';
}

static int is_digit(char c) { return c >= '0' && c <= '9'; }

static rf_status push_token(parser *p, size_t *cap, const token *t)
{
    formula *f = p->f;
    if (f->ntoks == *cap) {
        size_t ncap = *cap ? *cap * 2 : 16;
        token *nt = realloc(f->toks, ncap * sizeof *nt);
        if (!nt)
            return error_nomem(p->err, p->where);
        f->toks = nt;
        *cap = ncap;
    }
    f->toks[f->ntoks++] = *t;
    return RF_OK;
}

/* Reads a quoted run starting at src[i] == q, where a doubled q stands for
 * one q. Returns the decoded copy and sets *end past the closing quote, or
 * NULL with *end = 0 when unterminated (or *end = 1 on no memory). */
static char *read_quoted(const char *src, size_t i, char q, size_t *end)
{
    size_t j = i + 1, n = 0;
    for (;;) {
        if (src[j] == '\0') {
            *end = 0;
            return NULL;
        }
        if (src[j] == q) {
            if (src[j + 1] != q)
                break;
            j++;
        }
        j++;
        n++;
    }
    char *s = malloc(n + 1);
    if (!s) {
        *end = 1;
        return NULL;
    }
    size_t k = 0;
    for (j = i + 1; k < n; j++) {
        s[k++] = src[j];
        if (src[j] == q)
            j++;
    }
    s[k] = '\0';
    *end = j + 1;
    return s;
}

static rf_status lex(parser *p)
{
    const char *src = p->src;
    size_t i = 0, cap = 0;
    for (;;) {
        while (src[i] == ' ' || src[i] == '\t' || src[i] == '\r'
               || src[i] == '\n')
            i++;
        token t = {.kind = T_END, .pos = i, .fn = -1, .ref = -1};
        char c = src[i];
        if (c == '\0') {
            return push_token(p, &cap, &t);
        } else if (is_digit(c) || (c == '.' && is_digit(src[i + 1]))) {
            size_t j = i;
            while (is_digit(src[j]))
                j++;
            if (src[j] == '.') {
                j++;
                while (is_digit(src[j]))
                    j++;
            }
            /* An exponent only when digits follow: "2e" is 2 then name e. */
            if (src[j] == 'e' || src[j] == 'E') {
                size_t k = j + 1;
                if (src[k] == '+' || src[k] == '-')
                    k++;
                if (is_digit(src[k])) {
                    while (is_digit(src[k]))
                        k++;
                    j = k;
                }
            }
            t.kind = T_NUM;
            t.len = j - i;
            int bad = read_number(src + i, t.len, &t.num);
            if (bad != 0)
                return perr(p, "number %.*s%s at column %zu is too %s",
                            t.len > 40 ? 40 : (int)t.len, src + i,
                            t.len > 40 ? "..." : "", column_of(src, i),
                            bad == -1 ? "large" : "long");
            i = j;
        } else if (is_name_start((unsigned char)c)) {
            size_t j = i;
            while (is_name_char((unsigned char)src[j]))
                j++;
            t.kind = T_NAME;
            t.len = j - i;
            t.s = malloc(t.len + 1);
            if (!t.s)
                return error_nomem(p->err, p->where);
            memcpy(t.s, src + i, t.len);
            t.s[t.len] = '\0';
            i = j;
        } else if (c == '\'' || c == '"') {
            size_t end;
            t.s = read_quoted(src, i, c, &end);
            if (!t.s) {
                if (end == 1)
                    return error_nomem(p->err, p->where);
                return perr(p, "%s starting at column %zu has no closing %s",
                            c == '\'' ? "text" : "name", column_of(src, i),
                            c == '\'' ? "quote (')" : "double quote (\")");
            }
            t.kind = c == '\'' ? T_TEXT : T_NAME;
            t.quoted = c == '"';
            t.len = end - i;
            if (t.quoted && t.s[0] == '\0') {
                free(t.s);
                return perr(p, "empty column name \"\" at column %zu",
                            column_of(src, i));
            }
            i = end;
        } else {
            static const char ops1[] = "+-*/^=<>";
            t.len = 1;
            if (c == '(') {
                t.kind = T_LPAREN;
            } else if (c == ')') {
                t.kind = T_RPAREN;
            } else if (c == ',') {
                t.kind = T_COMMA;
            } else if (strchr(ops1, c)) {
                t.kind = T_OP;
                switch (c) {
                case '+': t.op = OP_ADD; break;
                case '-': t.op = OP_SUB; break;
                case '*': t.op = OP_MUL; break;
                case '/': t.op = OP_DIV; break;
                case '^': t.op = OP_POW; break;
                case '=': t.op = OP_EQ; break;
                case '<':
                    if (src[i + 1] == '>') {
                        t.op = OP_NE; t.len = 2;
                    } else if (src[i + 1] == '=') {
                        t.op = OP_LE; t.len = 2;
                    } else {
                        t.op = OP_LT;
                    }
                    break;
                default: /* '>' */
                    if (src[i + 1] == '=') {
                        t.op = OP_GE; t.len = 2;
                    } else {
                        t.op = OP_GT;
                    }
                    break;
                }
            } else if (c == '!' && src[i + 1] == '=') {
                return perr(p, "unexpected '!=' at column %zu (write <> for "
                            "'not equal')", column_of(src, i));
            } else if ((unsigned char)c < 0x20 || c == 0x7F) {
                return perr(p, "unexpected control character (byte 0x%02X) "
                            "at column %zu", (unsigned)(unsigned char)c,
                            column_of(src, i));
            } else {
                return perr(p, "unexpected character '%c' at column %zu", c,
                            column_of(src, i));
            }
            i += t.len;
        }
        rf_status st = push_token(p, &cap, &t);
        if (st != RF_OK) {
            free(t.s);
            return st;
        }
    }
}

/* ---- parser / compiler -------------------------------------------------- */

/* Grammar, with precedence from the operator table of OpenFormula
 * (OASIS OpenDocument 1.2 Part 2, published as ISO/IEC 26300-2:2015),
 * lowest first:
 *   expr    := sum   (cmp sum)*          comparisons = <> < <= > >=
 *   sum     := term  (('+'|'-') term)*
 *   term    := power (('*'|'/') power)*
 *   power   := unary ('^' unary)*        left-associative: 2^3^2 = 64
 *   unary   := ('+'|'-') unary | primary prefix sign binds tighter than ^:
 *                                        -2^2 = 4
 *   primary := number | 'text' | name | FUNC '(' [expr (',' expr)*] ')'
 *            | '(' expr ')'
 * Every level is left-associative, as in the standard's table. */

static rf_status parse_expr(parser *p);

static token *cur(parser *p) { return &p->f->toks[p->at]; }

static rf_status emit(parser *p, int op, int arg, int nargs, double num,
                      int push)
{
    formula *f = p->f;
    if (f->ncode == f->capcode) {
        size_t ncap = f->capcode ? f->capcode * 2 : 32;
        instr *nc = realloc(f->code, ncap * sizeof *nc);
        if (!nc)
            return error_nomem(p->err, p->where);
        f->code = nc;
        f->capcode = ncap;
    }
    f->code[f->ncode++] = (instr){.op = op, .arg = arg, .nargs = nargs,
                                  .num = num};
    p->height += push;
    if (p->height > FORMULA_STACK_MAX)
        return perr(p, "formula is too complex: it needs more than %d values "
                    "at once (split it into several derive lines)",
                    FORMULA_STACK_MAX);
    return RF_OK;
}

static rf_status expected_value(parser *p)
{
    char d[96];
    token *t = cur(p);
    if (t->kind == T_RPAREN && p->at > 0
        && p->f->toks[p->at - 1].kind == T_LPAREN)
        return perr(p, "empty parentheses at column %zu",
                    column_of(p->src, p->f->toks[p->at - 1].pos));
    if (t->kind == T_OP && t->op == OP_EQ && p->at > 0
        && p->f->toks[p->at - 1].kind == T_OP
        && p->f->toks[p->at - 1].op == OP_EQ)
        return perr(p, "expected a value at column %zu, found '=' (write a "
                    "single = for 'equal')", column_of(p->src, t->pos));
    return perr(p, "expected a value at column %zu, found %s",
                column_of(p->src, t->pos), describe(p, t, d, sizeof d));
}

/* Edit distance, ASCII case-insensitive; short strings only. */
static size_t distance(const char *a, const char *b)
{
    size_t la = strlen(a), lb = strlen(b);
    if (la > 30 || lb > 30)
        return 99;
    size_t row[32];
    for (size_t j = 0; j <= lb; j++)
        row[j] = j;
    for (size_t i = 1; i <= la; i++) {
        size_t diag = row[0];
        row[0] = i;
        for (size_t j = 1; j <= lb; j++) {
            size_t up = row[j];
            int ca = a[i - 1], cb = b[j - 1];
            if (ca >= 'a' && ca <= 'z') ca -= 32;
            if (cb >= 'a' && cb <= 'z') cb -= 32;
            size_t best = diag + (ca != cb);
            if (row[j] + 1 < best) best = row[j] + 1;
            if (row[j - 1] + 1 < best) best = row[j - 1] + 1;
            row[j] = best;
            diag = up;
        }
    }
    return row[lb];
}

static int starts_with_ci(const char *whole, const char *part)
{
    size_t n = strlen(part);
    return n >= 2 && strncasecmp(whole, part, n) == 0;
}

/* The known function a misspelt name most likely meant, or NULL: one a
 * name begins (LOG -> LOG10), else the nearest within 1 edit for names of
 * up to 3 letters and 2 edits for longer ones. */
static const char *nearest_function(const char *name)
{
    for (int i = 0; i < FN_COUNT; i++)
        if (starts_with_ci(fns[i].name, name))
            return fns[i].name;
    size_t limit = strlen(name) <= 3 ? 1 : 2, best = limit + 1;
    const char *found = NULL;
    for (int i = 0; i < FN_COUNT; i++) {
        size_t d = distance(name, fns[i].name);
        if (d < best) {
            best = d;
            found = fns[i].name;
        }
    }
    return found;
}

static int find_function(const char *name)
{
    for (int i = 0; i < FN_COUNT; i++)
        if (strcasecmp(name, fns[i].name) == 0)
            return i;
    return -1;
}

static rf_status arity_error(parser *p, int fn, int got)
{
    const struct fn_info *fi = &fns[fn];
    if (fi->max_args == 0)
        return perr(p, "%s takes %d or more arguments, got %d", fi->name,
                    fi->min_args, got);
    if (fi->min_args == fi->max_args)
        return perr(p, "%s takes %d argument%s, got %d", fi->name,
                    fi->min_args, fi->min_args == 1 ? "" : "s", got);
    return perr(p, "%s takes %d or %d arguments, got %d", fi->name,
                fi->min_args, fi->max_args, got);
}

/* At the function name; compiles the call. IF becomes
 *   cond JFALSE(else) a JUMP(end) else: b end:
 * so a blank or failing value in the branch not taken never stops a row. */
static rf_status parse_call(parser *p)
{
    token *name = cur(p);
    int fn = find_function(name->s);
    if (fn < 0) {
        const char *near = nearest_function(name->s);
        if (near)
            return perr(p, "unknown function '%s' at column %zu (did you "
                        "mean %s?)", name->s, column_of(p->src, name->pos),
                        near);
        return perr(p, "unknown function '%s' at column %zu (the functions "
                    "are LN, LOG10, EXP, SQRT, ABS, MIN, MAX, ROUND, IF, "
                    "YEAR, MONTH, DAY)", name->s,
                    column_of(p->src, name->pos));
    }
    name->fn = fn;
    size_t open = ++p->at;  /* the '(' */
    p->at++;
    int nargs = 0;
    size_t jfalse = 0, jump = 0;
    int base = p->height;
    if (cur(p)->kind != T_RPAREN) {
        for (;;) {
            token *t = cur(p);
            if (t->kind == T_COMMA || t->kind == T_RPAREN)
                return perr(p, "missing argument to %s at column %zu",
                            fns[fn].name, column_of(p->src, t->pos));
            rf_status st = parse_expr(p);
            if (st != RF_OK)
                return st;
            nargs++;
            if (fn == FN_IF && nargs == 1) {
                jfalse = p->f->ncode;
                if ((st = emit(p, C_JFALSE, 0, 0, 0, -1)) != RF_OK)
                    return st;
            } else if (fn == FN_IF && nargs == 2 && cur(p)->kind == T_COMMA) {
                jump = p->f->ncode;
                if ((st = emit(p, C_JUMP, 0, 0, 0, -1)) != RF_OK)
                    return st;
                p->f->code[jfalse].arg = (int)p->f->ncode;
            }
            t = cur(p);
            if (t->kind == T_COMMA) {
                p->at++;
                continue;
            }
            if (t->kind == T_RPAREN)
                break;
            if (t->kind == T_END)
                return perr(p, "unbalanced parenthesis: '(' at column %zu is "
                            "never closed", column_of(p->src,
                                                      p->f->toks[open].pos));
            char d[96];
            return perr(p, "unexpected %s at column %zu in the arguments of "
                        "%s (missing operator or comma?)",
                        describe(p, t, d, sizeof d),
                        column_of(p->src, t->pos), fns[fn].name);
        }
    }
    token *close = cur(p);
    p->at++;
    if (nargs < fns[fn].min_args
        || (fns[fn].max_args && nargs > fns[fn].max_args))
        return arity_error(p, fn, nargs);
    rf_status st = RF_OK;
    if (fn == FN_IF) {
        if (nargs == 2) {
            /* OpenFormula: IF without an else gives FALSE, here the number 0 */
            jump = p->f->ncode;
            if ((st = emit(p, C_JUMP, 0, 0, 0, -1)) != RF_OK)
                return st;
            p->f->code[jfalse].arg = (int)p->f->ncode;
            if ((st = emit(p, C_NUM, 0, 0, 0.0, 1)) != RF_OK)
                return st;
            close->add_zero = 1;
        }
        p->f->code[jump].arg = (int)p->f->ncode;
        p->height = base + 1;
        return RF_OK;
    }
    if (fn == FN_ROUND && nargs == 1) {
        if ((st = emit(p, C_NUM, 0, 0, 0.0, 1)) != RF_OK)
            return st;
        close->add_zero = 1;
        nargs = 2;
    }
    return emit(p, C_CALL, fn, nargs, 0, 1 - nargs);
}

static rf_status add_ref(parser *p, token *t)
{
    formula *f = p->f;
    for (size_t i = 0; i < f->nrefs; i++)
        if (strcmp(f->refs[i], t->s) == 0) {
            t->ref = (int)i;
            return emit(p, C_REF, t->ref, 0, 0, 1);
        }
    /* refs has room for every token (allocated after lexing) */
    f->refs[f->nrefs] = t->s;
    t->ref = (int)f->nrefs++;
    return emit(p, C_REF, t->ref, 0, 0, 1);
}

static rf_status parse_unary(parser *p);

static rf_status parse_primary(parser *p)
{
    token *t = cur(p);
    switch (t->kind) {
    case T_NUM:
        p->at++;
        return emit(p, C_NUM, 0, 0, t->num, 1);
    case T_TEXT:
        p->at++;
        return emit(p, C_TEXT, (int)(t - p->f->toks), 0, 0, 1);
    case T_NAME:
        if (!t->quoted && p->f->toks[p->at + 1].kind == T_LPAREN)
            return parse_call(p);
        p->at++;
        return add_ref(p, t);
    case T_LPAREN: {
        size_t open = p->at++;
        rf_status st = parse_expr(p);
        if (st != RF_OK)
            return st;
        token *c = cur(p);
        if (c->kind == T_RPAREN) {
            p->at++;
            return RF_OK;
        }
        if (c->kind == T_END)
            return perr(p, "unbalanced parenthesis: '(' at column %zu is "
                        "never closed", column_of(p->src,
                                                  p->f->toks[open].pos));
        char d[96];
        return perr(p, "unexpected %s at column %zu (missing operator?)",
                    describe(p, c, d, sizeof d), column_of(p->src, c->pos));
    }
    default:
        return expected_value(p);
    }
}

static rf_status parse_unary(parser *p)
{
    if (++p->depth > FORMULA_DEPTH_MAX)
        return perr(p, "formula is nested too deeply at column %zu (more "
                    "than %d levels of parentheses, functions or signs)",
                    column_of(p->src, cur(p)->pos), FORMULA_DEPTH_MAX);
    token *t = cur(p);
    rf_status st;
    if (t->kind == T_OP && (t->op == OP_ADD || t->op == OP_SUB)) {
        p->at++;
        st = parse_unary(p);
        /* Prefix + returns its operand unchanged (OpenFormula), so it
         * compiles to nothing; prefix - negates. */
        if (st == RF_OK && t->op == OP_SUB)
            st = emit(p, C_NEG, 0, 0, 0, 0);
    } else {
        st = parse_primary(p);
    }
    p->depth--;
    return st;
}

/* One left-associative level: operands by next, operators in [lo, hi]. */
static rf_status parse_level(parser *p, rf_status (*next)(parser *), int lo,
                             int hi)
{
    rf_status st = next(p);
    while (st == RF_OK && cur(p)->kind == T_OP && cur(p)->op >= lo
           && cur(p)->op <= hi) {
        int op = cur(p)->op;
        p->at++;
        if ((st = next(p)) == RF_OK)
            st = emit(p, op, 0, 0, 0, -1);
    }
    return st;
}

static rf_status parse_power(parser *p)
{
    return parse_level(p, parse_unary, OP_POW, OP_POW);
}

static rf_status parse_term(parser *p)
{
    return parse_level(p, parse_power, OP_MUL, OP_DIV);
}

static rf_status parse_sum(parser *p)
{
    return parse_level(p, parse_term, OP_ADD, OP_SUB);
}

static rf_status parse_expr(parser *p)
{
    return parse_level(p, parse_sum, OP_EQ, OP_GE);
}

rf_status formula_parse(const char *src, const char *where, formula **out,
                        rf_error *err)
{
    assert(src && out);
    *out = NULL;
    size_t n = strlen(src);
    if (n > FORMULA_TEXT_MAX)
        return error_set(err, RF_EINPUT, where, "formula is too long (%zu "
                         "bytes; at most %d)", n, FORMULA_TEXT_MAX);
    formula *f = calloc(1, sizeof *f);
    if (!f)
        return error_nomem(err, where);
    parser p = {.src = src, .where = where, .err = err, .f = f};
    rf_status st = lex(&p);
    if (st != RF_OK)
        goto fail;
    if (f->toks[0].kind == T_END) {
        st = error_set(err, RF_EINPUT, where, "empty formula");
        goto fail;
    }
    f->refs = malloc(f->ntoks * sizeof *f->refs);
    if (!f->refs) {
        st = error_nomem(err, where);
        goto fail;
    }
    if ((st = parse_expr(&p)) != RF_OK)
        goto fail;
    token *t = cur(&p);
    if (t->kind != T_END) {
        if (t->kind == T_RPAREN)
            st = perr(&p, "unbalanced parenthesis: ')' at column %zu has no "
                      "matching '('", column_of(src, t->pos));
        else {
            char d[96];
            st = perr(&p, "unexpected %s at column %zu (missing operator?)",
                      describe(&p, t, d, sizeof d), column_of(src, t->pos));
        }
        goto fail;
    }
    assert(p.height == 1);
    *out = f;
    return RF_OK;
fail:
    formula_free(f);
    return st;
}

void formula_free(formula *f)
{
    if (!f)
        return;
    for (size_t i = 0; i < f->ntoks; i++)
        free(f->toks[i].s);
    free(f->toks);
    free(f->code);
    free(f->refs);
    free(f);
}

size_t formula_nrefs(const formula *f) { return f->nrefs; }

const char *formula_ref(const formula *f, size_t i)
{
    assert(i < f->nrefs);
    return f->refs[i];
}

/* ---- evaluation --------------------------------------------------------- */

typedef struct slot {
    fvalue v;
    int src;   /* the ref the value came from, or -1 */
} slot;

static int why_set(char *why, size_t whylen, const char *fmt, ...)
    __attribute__((format(printf, 3, 4)));

static int why_set(char *why, size_t whylen, const char *fmt, ...)
{
    if (why && whylen) {
        va_list ap;
        va_start(ap, fmt);
        vsnprintf(why, whylen, fmt, ap);
        va_end(ap);
    }
    return -1;
}

/* Text for a message, cut at a UTF-8 character boundary after 60 bytes. */
static int show_len(const char *s)
{
    size_t n = strlen(s);
    if (n <= 60)
        return (int)n;
    n = 60;
    while (n > 0 && ((unsigned char)s[n] & 0xC0) == 0x80)
        n--;
    return (int)n;
}

/* "district is 'Riverside', not a number" or "'Riverside' is text, not a
 * number" for a literal or a computed text. */
static int not_number(const formula *f, const slot *s, char *why,
                      size_t whylen)
{
    const char *t = s->v.text ? s->v.text : "";
    const char *more = strlen(t) > (size_t)show_len(t) ? "..." : "";
    if (s->src >= 0)
        return why_set(why, whylen, "%s is '%.*s%s', not a number",
                    f->refs[s->src], show_len(t), t, more);
    return why_set(why, whylen, "'%.*s%s' is text, not a number", show_len(t),
                t, more);
}

/* Spreadsheets treat numbers equal to about 15 significant digits as equal
 * when comparing, so 0.1+0.2 = 0.3 is TRUE in the workbook. Relative
 * tolerance 2^-48, about 14.5 digits (common practice; value from memory). */
static int approx_equal(double a, double b)
{
    return a == b || fabs(a - b) <= fmax(fabs(a), fabs(b)) * 0x1p-48;
}

/* Case-insensitive over ASCII letters; other bytes compare as they are
 * (common practice: spreadsheet equality of text ignores case by default). */
static int text_compare(const char *a, const char *b)
{
    for (;; a++, b++) {
        int ca = (unsigned char)*a, cb = (unsigned char)*b;
        if (ca >= 'A' && ca <= 'Z') ca += 32;
        if (cb >= 'A' && cb <= 'Z') cb += 32;
        if (ca != cb || ca == 0)
            return (ca > cb) - (ca < cb);
    }
}

/* Order of two values: numbers numerically, texts by text_compare, and any
 * number before any text (OpenFormula's ordering of mixed types, so = is
 * FALSE and <> TRUE between a number and a text; from memory). */
static int compare(const fvalue *a, const fvalue *b)
{
    if (a->type == FV_NUMBER && b->type == FV_NUMBER) {
        if (approx_equal(a->num, b->num))
            return 0;
        return a->num < b->num ? -1 : 1;
    }
    if (a->type == FV_TEXT && b->type == FV_TEXT)
        return text_compare(a->text, b->text);
    return a->type == FV_NUMBER ? -1 : 1;
}

/* ROUND(x, d), half away from zero at d decimal digits (OpenFormula ROUND).
 * The decision is made on x's decimal form at 15 significant digits, the
 * precision spreadsheets show and round at, so ROUND(2.675, 2) is 2.68 as a
 * user expects although the double nearest 2.675 lies just below it. The
 * kept digits M then become M * 10^-d through strtod, which rounds that
 * decimal value correctly to the nearest double. */
static double round_digits(double x, double digits)
{
    if (x == 0 || !isfinite(x))
        return x;
    double dt = trunc(digits);  /* OpenFormula: non-integer digits truncate */
    if (dt > 400)
        return x;       /* beyond the last digit of any double */
    if (dt < -400)
        return 0.0;     /* beyond the first digit of any double */
    int d = (int)dt;
    char buf[64];
    snprintf(buf, sizeof buf, "%.14e", fabs(x));
    /* buf is "D.DDDDDDDDDDDDDDe[+-]XX" (the point may be a locale's) */
    char digs[16];
    int nd = 0;
    const char *s = buf;
    for (; *s && *s != 'e'; s++)
        if (is_digit(*s) && nd < 15)
            digs[nd++] = *s;
    int e = atoi(s + 1);
    int keep = e + d + 1;  /* digits at or above 10^-d */
    if (keep >= 15)
        return x;
    if (keep < 0)
        return 0.0;
    long long m = 0;
    for (int i = 0; i < keep; i++)
        m = m * 10 + (digs[i] - '0');
    if (digs[keep] >= '5')
        m++;
    if (m == 0)
        return 0.0;
    snprintf(buf, sizeof buf, "%llde%d", m, -d);  /* no decimal point */
    double r = strtod(buf, NULL);
    return x < 0 ? -r : r;
}

int formula_eval(const formula *f, const fvalue *refs, fvalue *out,
                 char *why, size_t whylen)
{
    slot st[FORMULA_STACK_MAX];
    int sp = 0;
    char nb[40], nb2[40];
    for (size_t pc = 0; pc < f->ncode; pc++) {
        const instr *in = &f->code[pc];
        switch (in->op) {
        case C_NUM:
            st[sp++] = (slot){{FV_NUMBER, in->num, NULL}, -1};
            continue;
        case C_TEXT:
            st[sp++] = (slot){{FV_TEXT, 0, f->toks[in->arg].s}, -1};
            continue;
        case C_REF: {
            const fvalue *r = &refs[in->arg];
            const char *name = f->refs[in->arg];
            switch (r->type) {
            case FV_BLANK:
                return why_set(why, whylen, "%s is blank", name);
            case FV_ERROR:
                return why_set(why, whylen, "%s is %s", name,
                            r->text ? r->text : "an error");
            case FV_NUMBER:
                if (!isfinite(r->num))
                    return why_set(why, whylen, "%s is not a finite number",
                                name);
                break;
            case FV_TEXT:
                break;
            }
            st[sp++] = (slot){*r, in->arg};
            if (r->type == FV_TEXT && !r->text)
                st[sp - 1].v.text = "";
            continue;
        }
        case C_JUMP:
            pc = (size_t)in->arg - 1;
            continue;
        case C_JFALSE: {
            slot *c = &st[--sp];
            if (c->v.type != FV_NUMBER)
                return not_number(f, c, why, whylen);
            if (c->v.num == 0)
                pc = (size_t)in->arg - 1;
            continue;
        }
        case OP_EQ: case OP_NE: case OP_LT: case OP_LE: case OP_GT:
        case OP_GE: {
            sp--;
            int c = compare(&st[sp - 1].v, &st[sp].v), r = 0;
            switch (in->op) {
            case OP_EQ: r = c == 0; break;
            case OP_NE: r = c != 0; break;
            case OP_LT: r = c < 0; break;
            case OP_LE: r = c <= 0; break;
            case OP_GT: r = c > 0; break;
            default:    r = c >= 0; break;
            }
            st[sp - 1] = (slot){{FV_NUMBER, r, NULL}, -1};
            continue;
        }
        default:
            break;
        }

        /* Everything below works on numbers only. */
        int nargs = in->op == C_CALL ? in->nargs
                    : in->op == C_NEG ? 1 : 2;
        slot *a = &st[sp - nargs];
        for (int i = 0; i < nargs; i++)
            if (a[i].v.type != FV_NUMBER)
                return not_number(f, &a[i], why, whylen);
        /* Extended precision throughout (see formula.h). */
        long double x = a[0].v.num, y = nargs > 1 ? a[1].v.num : 0, r = 0;
        switch (in->op) {
        case C_NEG: r = -x; break;
        case OP_ADD: r = x + y; break;
        case OP_SUB: r = x - y; break;
        case OP_MUL: r = x * y; break;
        case OP_DIV:
            if (y == 0)
                return why_set(why, whylen, "division by zero");
            r = x / y;
            break;
        case OP_POW:
            if (x == 0 && y < 0)
                return why_set(why, whylen, "division by zero (0 ^ %s)",
                            show_num((double)y, nb, sizeof nb));
            /* OpenFormula leaves 0^0 to the implementation and workbooks
             * differ (from memory); refusing keeps a live formula from
             * silently disagreeing with rowfit. */
            if (x == 0 && y == 0)
                return why_set(why, whylen, "0 ^ 0 is undefined");
            if (x < 0 && y != floorl(y))
                return why_set(why, whylen, "(%s) ^ %s has no real value",
                            show_num((double)x, nb, sizeof nb),
                            show_num((double)y, nb2, sizeof nb2));
            r = powl(x, y);
            break;
        case C_CALL:
            switch (in->arg) {
            case FN_LN:
            case FN_LOG10:
                if (x <= 0)
                    return why_set(why, whylen, "%s of %s", fns[in->arg].name,
                                show_num((double)x, nb, sizeof nb));
                r = in->arg == FN_LN ? logl(x) : log10l(x);
                break;
            case FN_EXP: r = expl(x); break;
            case FN_SQRT:
                if (x < 0)
                    return why_set(why, whylen, "SQRT of %s",
                                show_num((double)x, nb, sizeof nb));
                r = sqrtl(x);
                break;
            case FN_ABS: r = fabsl(x); break;
            case FN_MIN:
            case FN_MAX:
                r = x;
                for (int i = 1; i < nargs; i++)
                    r = in->arg == FN_MIN ? fminl(r, a[i].v.num)
                                          : fmaxl(r, a[i].v.num);
                break;
            case FN_ROUND: r = round_digits((double)x, (double)y); break;
            case FN_YEAR:
            case FN_MONTH:
            case FN_DAY: {
                int yy, mm, dd;
                /* A time of day is a fraction: the day is the floor. */
                if (table_serial_date((double)floorl(x), &yy, &mm, &dd) != 0)
                    return why_set(why, whylen, "%s of %s: not a date (serial "
                                "days run from 1 to 2958465)",
                                fns[in->arg].name,
                                show_num((double)x, nb, sizeof nb));
                r = in->arg == FN_YEAR ? yy : in->arg == FN_MONTH ? mm : dd;
                break;
            }
            default:
                assert(!"unreachable function");
            }
            break;
        default:
            assert(!"unreachable opcode");
        }
        if (!isfinite((double)r))
            return why_set(why, whylen, "result is too large");
        sp -= nargs;
        st[sp++] = (slot){{FV_NUMBER, r, NULL}, -1};
    }
    assert(sp == 1);
    *out = st[0].v;
    return 0;
}

/* ---- printing ----------------------------------------------------------- */

typedef struct sbuf {
    char *s;
    size_t n, cap;
    int oom;
} sbuf;

static void put(sbuf *b, const char *s, size_t n)
{
    if (b->oom)
        return;
    if (b->n + n + 1 > b->cap) {
        size_t ncap = b->cap ? b->cap : 64;
        while (b->n + n + 1 > ncap)
            ncap *= 2;
        char *ns = realloc(b->s, ncap);
        if (!ns) {
            b->oom = 1;
            return;
        }
        b->s = ns;
        b->cap = ncap;
    }
    memcpy(b->s + b->n, s, n);
    b->n += n;
    b->s[b->n] = '\0';
}

static void puts_(sbuf *b, const char *s) { put(b, s, strlen(s)); }

/* The token stream again, in spreadsheet spelling. Every parenthesis the
 * user wrote is kept and none is added: a workbook applies the same
 * OpenFormula precedence, so the same tokens mean the same formula. No
 * spaces are written, since a space between references is an operator in
 * some spreadsheets. */
char *formula_spreadsheet(const formula *f, const char *const *cells)
{
    assert(cells || f->nrefs == 0);
    sbuf b = {0};
    puts_(&b, "=");
    for (size_t i = 0; i < f->ntoks; i++) {
        const token *t = &f->toks[i];
        char num[40];
        switch (t->kind) {
        case T_END: break;
        case T_NUM:
            format_roundtrip(t->num, num, sizeof num);
            puts_(&b, num);
            break;
        case T_TEXT:
            puts_(&b, "\"");
            for (const char *s = t->s; *s; s++) {
                put(&b, s, 1);
                if (*s == '"')  /* spreadsheet text doubles its quotes */
                    put(&b, s, 1);
            }
            puts_(&b, "\"");
            break;
        case T_NAME:
            if (t->fn >= 0)
                puts_(&b, fns[t->fn].name);
            else
                puts_(&b, cells[t->ref]);
            break;
        case T_LPAREN: puts_(&b, "("); break;
        case T_RPAREN:
            if (t->add_zero)
                puts_(&b, ",0");
            puts_(&b, ")");
            break;
        case T_COMMA: puts_(&b, ","); break;
        case T_OP: puts_(&b, op_text[t->op]); break;
        }
    }
    if (b.oom) {
        free(b.s);
        return NULL;
    }
    return b.s;
}
