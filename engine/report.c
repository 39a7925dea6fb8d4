/*
 * report.c: the result workbook's layout (see report.h, docs/workbook.md).
 *
 * Estimates carries live formulas: each row's estimate is the sum of the
 * Coefficients sheet's estimates times the row's own input cells, and the
 * residual is target minus estimate, each with rowfit's value cached. A
 * user who edits an input sees the estimate follow in any spreadsheet
 * program; one that does not recalculate still shows rowfit's numbers.
 */
#include "report.h"

#include "formula.h"

#include <assert.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define CAUTION_PRICE \
    "An estimate is a statistical summary of the rows the model learned " \
    "from, not an appraisal or a valuation. It assumes the model's form is " \
    "right and that new rows resemble the fitted ones. Follow local law, " \
    "professional standards and licensed appraisal practice before relying " \
    "on any figure here."

/* Longest formula a spreadsheet program accepts (8,192 characters, from
 * memory); a longer estimate formula (a category with hundreds of levels)
 * is written as its value instead. */
#define FORMULA_CHARS_MAX 8000

#define CAUTION_PEOPLE \
    "A probability here summarises past records, and past decisions can " \
    "carry bias that the model learns and repeats. It supports a person's " \
    "decision about a person and never replaces it. Check the results for " \
    "each group of people before use, and follow local employment, " \
    "education and anti-discrimination law and your organisation's " \
    "policies."

/* Rows of measures on the Summary sheet (the confusion matrix and the
 * caution below them are not filtered): every model's first rows, each
 * model's own, those of solver gradient and of a penalty. */
#define SUMMARY_COMMON 7
#define SUMMARY_LINEAR 13
#define SUMMARY_LOGISTIC 18
#define SUMMARY_GRADIENT 5
#define SUMMARY_CV 4

/* Points a chart plots at most (the first rows of Estimates). */
#define CHART_POINTS_MAX 20000

/* Grows a string buffer; returns -1 on no memory. */
typedef struct strbuf {
    char *s;
    size_t n, cap;
} strbuf;

static int sb_add(strbuf *b, const char *fmt, ...)
    __attribute__((format(printf, 2, 3)));

#include <stdarg.h>
static int sb_add(strbuf *b, const char *fmt, ...)
{
    for (;;) {
        va_list ap;
        va_start(ap, fmt);
        size_t room = b->cap - b->n;
        int k = vsnprintf(b->s ? b->s + b->n : NULL, room, fmt, ap);
        va_end(ap);
        if (k < 0)
            return -1;
        if ((size_t)k < room) {
            b->n += (size_t)k;
            return 0;
        }
        size_t cap = b->cap ? 2 * b->cap : 256;
        while (cap - b->n <= (size_t)k)
            cap *= 2;
        char *s = realloc(b->s, cap);
        if (s == NULL)
            return -1;
        b->s = s;
        b->cap = cap;
    }
}

/* Writes a table cell as it was: numbers as numbers, dates as dates, text
 * as text; blank stays blank. */
static rf_status write_cell(writer_sheet *s, uint32_t r, uint16_t c,
                            const table *t, size_t row, size_t col)
{
    switch (table_cell_type(t, row, col)) {
    case CELL_BLANK:
        return RF_OK;
    case CELL_NUMBER:
        return writer_number(s, r, c, table_cell_number(t, row, col),
                             WFMT_NONE, NULL);
    case CELL_DATE:
        return writer_number(s, r, c, table_cell_number(t, row, col),
                             WFMT_DATE, NULL);
    case CELL_BOOL:
        return writer_text(s, r, c,
                           table_cell_number(t, row, col) ? "TRUE" : "FALSE",
                           WFMT_NONE);
    case CELL_TEXT:
    case CELL_ERROR:
        return writer_text(s, r, c, table_cell_text(t, row, col), WFMT_NONE);
    }
    return RF_OK;
}

/* Column letters of a 0-based column: 0 -> A. */
static void col_name(uint16_t col, char *buf, size_t n)
{
    char tmp[16];
    writer_cell_name(0, col, tmp, sizeof tmp);
    size_t k = 0;
    while (tmp[k] && (tmp[k] < '0' || tmp[k] > '9') && k + 1 < n) {
        buf[k] = tmp[k];
        k++;
    }
    buf[k] = '\0';
}

/* A quoted text literal for a spreadsheet formula: "a""b". */
static int sb_quoted(strbuf *b, const char *s)
{
    if (sb_add(b, "\""))
        return -1;
    for (const char *q; (q = strchr(s, '"')) != NULL; s = q + 1)
        if (sb_add(b, "%.*s\"\"", (int)(q - s), s))
            return -1;
    return sb_add(b, "%s\"", s);
}

/* Layout of the Estimates sheet. */
typedef struct est_layout {
    uint16_t c_source, c_row, c_id, c_target, c_est, c_res, c_low, c_high,
        c_cv, c_status, c_input0;
    int has_id;
    size_t ncols;
    /* table columns that derived inputs read, shown after the inputs so
     * the derived cells can be live formulas over them */
    uint16_t c_extra0;
    size_t n_extra;
    const char **extra;
    long *extra_col[2];   /* their column in data and in score, or -1 */
} est_layout;

static long input_named(const design *d, const char *name)
{
    for (size_t i = 0; i < d->n_inputs; i++)
        if (strcmp(d->inputs[i].name, name) == 0)
            return (long)i;
    return -1;
}

static long derive_named(const job *j, const char *name)
{
    for (size_t k = 0; k < j->n_derives; k++)
        if (strcmp(j->derives[k].name, name) == 0)
            return (long)k;
    return -1;
}

/* Collects the plain columns derive k reads, through other derives, that
 * are not inputs themselves. */
static int collect_extra(const job *j, const design *d, size_t k,
                         est_layout *L)
{
    const formula *f = d->formulas[k];
    for (size_t i = 0; i < formula_nrefs(f); i++) {
        const char *name = formula_ref(f, i);
        long dk = derive_named(j, name);
        if (dk >= 0 && (size_t)dk < k) {
            if (input_named(d, name) < 0 && collect_extra(j, d, (size_t)dk, L))
                return -1;
            continue;
        }
        if (input_named(d, name) >= 0)
            continue;
        int seen = 0;
        for (size_t e = 0; e < L->n_extra; e++)
            seen |= strcmp(L->extra[e], name) == 0;
        if (seen)
            continue;
        const char **x = realloc(L->extra, (L->n_extra + 1) * sizeof *x);
        if (x == NULL)
            return -1;
        L->extra = x;
        L->extra[L->n_extra++] = name;
    }
    return 0;
}

/* The spreadsheet text of derive k in sheet row r (0-based), without the
 * leading '=': references to inputs and extra columns become cells of the
 * row, references to other derives their own text in parentheses.
 * Returns a malloc'd string or NULL on no memory. */
static char *derive_text(const job *j, const design *d, const est_layout *L,
                         size_t k, uint32_t r)
{
    const formula *f = d->formulas[k];
    size_t nr = formula_nrefs(f);
    char **cells = calloc(nr ? nr : 1, sizeof *cells);
    char *out = NULL;
    if (cells == NULL)
        return NULL;
    for (size_t i = 0; i < nr; i++) {
        const char *name = formula_ref(f, i);
        long in = input_named(d, name), dk = derive_named(j, name);
        char cell[32] = "";
        if (in >= 0) {
            writer_cell_name(r, (uint16_t)(L->c_input0 + in), cell,
                             sizeof cell);
            cells[i] = strdup(cell);
        } else if (dk >= 0) {
            char *sub = derive_text(j, d, L, (size_t)dk, r);
            if (sub) {
                size_t len = strlen(sub) + 3;
                if ((cells[i] = malloc(len)) != NULL)
                    snprintf(cells[i], len, "(%s)", sub);
                free(sub);
            }
        } else {
            for (size_t e = 0; e < L->n_extra; e++)
                if (strcmp(L->extra[e], name) == 0)
                    writer_cell_name(r, (uint16_t)(L->c_extra0 + e), cell,
                                     sizeof cell);
            cells[i] = strdup(cell);
        }
        if (cells[i] == NULL)
            goto done;
    }
    char *text = formula_spreadsheet(f, (const char *const *)cells);
    if (text) {
        out = strdup(text[0] == '=' ? text + 1 : text);
        free(text);
    }
done:
    for (size_t i = 0; i < nr; i++)
        free(cells[i]);
    free(cells);
    return out;
}

/* The value of design term k (not the intercept) in sheet row r: the
 * input's cell, or for a category level EXACT(cell,"level"), which is 1
 * or 0 (TRUE or FALSE) in arithmetic. */
static int term_text(strbuf *b, const design *d, const est_layout *L,
                     uint32_t r, size_t k)
{
    char cell[32], col[16];
    for (size_t i = 0; i < d->n_inputs; i++) {
        const design_input *in = &d->inputs[i];
        if (k < in->first_term
            || k >= in->first_term + design_input_terms(in))
            continue;
        col_name((uint16_t)(L->c_input0 + i), col, sizeof col);
        snprintf(cell, sizeof cell, "%s%u", col, r + 1);
        if (!in->is_category)
            return sb_add(b, "%s", cell);
        /* EXACT, not '=': spreadsheets compare text ignoring case, and
         * 'North' and 'north' are two levels here */
        return sb_add(b, "EXACT(%s,", cell)
               || sb_quoted(b, design_term_level(in, k)) || sb_add(b, ")");
    }
    return sb_add(b, "0");
}

/* A network's estimate or probability for row r as a live formula over
 * the Weights sheet and the row's cells, for one hidden layer (with more,
 * each unit of the second layer would repeat the whole first, and the
 * text would outgrow what spreadsheets accept). The Weights sheet lists
 * the weights by layer, then output unit, then input unit, the bias last
 * (see write_weights); the standardizing of input unit k is in row k + 2,
 * the target's after them. Returns 1 when no formula is written (the
 * caller writes the value), -1 on no memory. */
static int network_formula(strbuf *b, const design *d, const est_layout *L,
                           const network_model *net, uint32_t r)
{
    b->n = 0;
    if (net->n_layers != 2)
        return 1;
    size_t in = net->units[0], hid = net->units[1];
    size_t out_base = hid * (in + 1);   /* the output unit's first row */
    int err = net->classify ? sb_add(b, "=1/(1+EXP(-(")
                            : sb_add(b, "=Weights!$G$%zu+Weights!$H$%zu*(",
                                     in + 2, in + 2);
    err = err || sb_add(b, "Weights!$D$%zu", out_base + hid + 2);
    for (size_t h = 0; h < hid && !err; h++) {
        size_t base = h * (in + 1);
        err = sb_add(b, "+Weights!$D$%zu*TANH(Weights!$D$%zu",
                     out_base + h + 2, base + in + 2);
        for (size_t k = 0; k < in && !err; k++)
            err = sb_add(b, "+Weights!$D$%zu*(", base + k + 2)
                  || term_text(b, d, L, r, net->col[k])
                  || sb_add(b, "-Weights!$G$%zu)/Weights!$H$%zu", k + 2,
                            k + 2);
        err = err || sb_add(b, ")");
        if (b->n > FORMULA_CHARS_MAX)
            return 1;
    }
    err = err || sb_add(b, net->classify ? ")))" : ")");
    if (err)
        return -1;
    return b->n > FORMULA_CHARS_MAX ? 1 : 0;
}

/* The estimate formula for row r (0-based sheet row), terms in order; for
 * a logistic model the probability 1/(1+EXP(-(x'b))). */
static int estimate_formula(strbuf *b, const design *d,
                            const linear_drop *drop, const est_layout *L,
                            uint32_t r, int logistic)
{
    b->n = 0;
    if (sb_add(b, logistic ? "=1/(1+EXP(-(" : "="))
        return -1;
    int first = 1;
    for (size_t k = 0; k < d->p; k++) {
        if (drop[k] != LINEAR_KEPT)
            continue;
        /* Coefficients!$B$(k+2) is term k's estimate */
        if (!first && sb_add(b, "+"))
            return -1;
        first = 0;
        if (sb_add(b, "Coefficients!$B$%zu", k + 2))
            return -1;
        if (d->intercept && k == 0)
            continue;
        if (sb_add(b, "*") || term_text(b, d, L, r, k))
            return -1;
    }
    if (first && sb_add(b, "0"))
        return -1;
    if (logistic && sb_add(b, ")))"))
        return -1;
    return 0;
}

/* The predicted-label formula of row r: the probability cell against the
 * threshold, giving the target's own labels. */
static int predicted_formula(strbuf *b, const design *d, const est_layout *L,
                             uint32_t r, double threshold)
{
    char cell[32], num[32];
    writer_cell_name(r, L->c_est, cell, sizeof cell);
    /* the shortest text that reads back as the same double: 0.3, not
     * 0.29999999999999999 */
    for (int digits = 15; digits <= 17; digits++) {
        snprintf(num, sizeof num, "%.*g", digits, threshold);
        if (strtod(num, NULL) == threshold)
            break;
    }
    b->n = 0;
    return sb_add(b, "=IF(%s>=%s,", cell, num)
           || sb_quoted(b, d->positive) || sb_add(b, ",")
           || sb_quoted(b, d->negative) || sb_add(b, ")");
}

static rf_status write_estimates(writer *w, const job *j, const table *data,
                                 const table *score, const design *d,
                                 const fit_result *rm, rf_warnings *warn,
                                 rf_error *err)
{
    const linear_model *m = rm->linear;
    const logistic_model *lm = rm->logistic;
    const network_model *net = rm->network;
    const linear_drop *drop = m ? m->drop : lm ? lm->drop : NULL;
    int cls = rm->classify;
    writer_sheet *s = writer_add_sheet(w, "Estimates", err);
    if (s == NULL)
        return err->status;
    est_layout L;
    strbuf fb = { NULL, 0, 0 };
    uint16_t c = 0;
    L.c_source = c++;
    L.c_row = c++;
    L.has_id = j->id.name != NULL;
    L.c_id = L.has_id ? c++ : 0;
    L.c_target = c++;
    L.c_est = c++;
    L.c_res = c++;
    L.c_low = m ? c++ : 0;
    L.c_high = m ? c++ : 0;
    L.c_cv = rm->cv ? c++ : 0;
    L.c_status = c++;
    L.c_input0 = c;
    L.c_extra0 = (uint16_t)(c + d->n_inputs);
    L.n_extra = 0;
    L.extra = NULL;
    L.extra_col[0] = L.extra_col[1] = NULL;
    for (size_t i = 0; i < d->n_inputs; i++)
        if (d->inputs[i].derive >= 0 && !d->inputs[i].is_category
            && collect_extra(j, d, (size_t)d->inputs[i].derive, &L)) {
            free(L.extra);
            return error_nomem(err, NULL);
        }
    L.ncols = L.c_extra0 + L.n_extra;
    L.extra_col[0] = malloc((L.n_extra + 1) * sizeof(long));
    L.extra_col[1] = malloc((L.n_extra + 1) * sizeof(long));
    const char **names = malloc(L.ncols * sizeof *names);
    if (names == NULL || L.extra_col[0] == NULL || L.extra_col[1] == NULL) {
        free(names);
        free(L.extra);
        free(L.extra_col[0]);
        free(L.extra_col[1]);
        return error_nomem(err, NULL);
    }
    for (size_t e = 0; e < L.n_extra; e++) {
        names[L.c_extra0 + e] = L.extra[e];
        L.extra_col[0][e] = table_find_column(data, L.extra[e]);
        L.extra_col[1][e] = score ? table_find_column(score, L.extra[e]) : -1;
    }
    names[L.c_source] = "source";
    names[L.c_row] = "row";
    if (L.has_id)
        names[L.c_id] = j->id.name;
    names[L.c_target] = j->target.name;
    names[L.c_est] = cls ? "probability" : "estimate";
    names[L.c_res] = cls ? "predicted" : "residual";
    if (m) {
        names[L.c_low] = "low";
        names[L.c_high] = "high";
    }
    if (rm->cv)
        names[L.c_cv] = cls ? "cv probability" : "cv estimate";
    names[L.c_status] = "status";
    for (size_t i = 0; i < d->n_inputs; i++)
        names[L.c_input0 + i] = d->inputs[i].name;

    rf_status st = RF_OK;
    writer_column(s, L.c_source, 8, WFMT_NONE);
    writer_column(s, L.c_row, 8, WFMT_INTEGER);
    if (L.has_id)
        writer_column(s, L.c_id, 12, WFMT_NONE);
    writer_column(s, L.c_target, 14, cls ? WFMT_NONE : WFMT_FIXED2);
    writer_column(s, L.c_est, 14, cls ? WFMT_FIXED4 : WFMT_FIXED2);
    writer_column(s, L.c_res, 14, cls ? WFMT_NONE : WFMT_FIXED2);
    if (m) {
        writer_column(s, L.c_low, 14, WFMT_FIXED2);
        writer_column(s, L.c_high, 14, WFMT_FIXED2);
    }
    if (rm->cv)
        writer_column(s, L.c_cv, 14, cls ? WFMT_FIXED4 : WFMT_FIXED2);
    writer_column(s, L.c_status, 28, WFMT_NONE);
    for (size_t i = 0; i < d->n_inputs; i++) {
        double wdt = strlen(d->inputs[i].name) + 3.0;
        writer_column(s, (uint16_t)(L.c_input0 + i), wdt < 10 ? 10 : wdt,
                      WFMT_NONE);
    }
    for (size_t e = 0; e < L.n_extra; e++) {
        double wdt = strlen(L.extra[e]) + 3.0;
        writer_column(s, (uint16_t)(L.c_extra0 + e), wdt < 10 ? 10 : wdt,
                      WFMT_NONE);
    }
    st = writer_header(s, names, L.ncols, (uint32_t)d->n_rows);
    free(names);
    if (st)
        goto out;

    char status[600], cell[32], cell2[32];
    for (size_t o = 0; o < d->n_rows; o++) {
        const design_row *row = &d->rows[o];
        const table *t = row->source == SOURCE_DATA ? data : score;
        uint32_t r = (uint32_t)(o + 1);
        writer_text(s, r, L.c_source,
                    row->source == SOURCE_DATA ? "data" : "score", WFMT_NONE);
        writer_number(s, r, L.c_row, table_row_source(t, row->row),
                      WFMT_INTEGER, NULL);
        long idc = row->source == SOURCE_DATA ? d->id_col_data
                                              : d->id_col_score;
        if (L.has_id && idc >= 0)
            write_cell(s, r, L.c_id, t, row->row, (size_t)idc);
        double target = (double)d->target[o];
        if (cls) {
            /* the class as the data wrote it: 'yes', 1, TRUE */
            if (row->source == SOURCE_DATA && d->target_col >= 0)
                write_cell(s, r, L.c_target, t, row->row,
                           (size_t)d->target_col);
            else if (d->label && d->label[o])
                writer_text(s, r, L.c_target, d->label[o], WFMT_NONE);
        } else if (isfinite(target))
            writer_number(s, r, L.c_target, target, WFMT_FIXED2, NULL);
        else if (row->source == SOURCE_DATA && d->target_col >= 0)
            write_cell(s, r, L.c_target, t, row->row, (size_t)d->target_col);

        const long double *x = design_row_x(d, o);
        if (row->status == ROW_SKIPPED) {
            snprintf(status, sizeof status, "skipped: %s", row->reason);
        } else if (net && !cls) {
            /* a live formula over the Weights sheet for one hidden
             * layer; a value for deeper networks (the Weights sheet still
             * has what makes it); the residual stays live */
            double est = row->status == ROW_FITTED ? rm->fitted[row->index]
                                                   : network_predict(net, x);
            int blank = !isfinite(est), nf = network_formula(&fb, d, &L,
                                                              net, r);
            if (nf < 0) {
                st = error_nomem(err, NULL);
                goto out;
            }
            if (!blank && nf == 0)
                writer_formula(s, r, L.c_est, fb.s, est, WFMT_FIXED2);
            else
                writer_number(s, r, L.c_est, est, WFMT_FIXED2, NULL);
            if (row->status == ROW_FITTED && !blank) {
                writer_cell_name(r, L.c_target, cell, sizeof cell);
                writer_cell_name(r, L.c_est, cell2, sizeof cell2);
                char rf[80];
                snprintf(rf, sizeof rf, "=%s-%s", cell, cell2);
                writer_formula(s, r, L.c_res, rf,
                               (double)d->target[o] - est, WFMT_FIXED2);
            }
            snprintf(status, sizeof status, "%s%s",
                     row->status == ROW_FITTED ? "fitted" : "estimated",
                     blank ? " (estimate not finite, left blank)" : "");
        } else if (cls) {
            double prob = net ? (row->status == ROW_FITTED
                                 ? rm->fitted[row->index]
                                 : network_predict(net, x))
                        : row->status == ROW_FITTED ? lm->prob[row->index]
                                                    : logistic_predict(lm, x);
            int blank = !isfinite(prob);
            int nf = lm ? estimate_formula(&fb, d, drop, &L, r, 1)
                        : network_formula(&fb, d, &L, net, r);
            if (nf < 0) {
                st = error_nomem(err, NULL);
                goto out;
            }
            if (!blank && nf == 0 && fb.n <= FORMULA_CHARS_MAX)
                writer_formula(s, r, L.c_est, fb.s, prob, WFMT_FIXED4);
            else if (!blank)
                writer_number(s, r, L.c_est, prob, WFMT_FIXED4, NULL);
            if (!blank) {
                const char *label = prob >= j->threshold ? d->positive
                                                         : d->negative;
                if (predicted_formula(&fb, d, &L, r, j->threshold)) {
                    st = error_nomem(err, NULL);
                    goto out;
                }
                writer_formula_text(s, r, L.c_res, fb.s, label, WFMT_NONE);
            }
            snprintf(status, sizeof status, "%s%s",
                     row->status == ROW_FITTED ? "fitted" : "estimated",
                     blank ? " (probability not finite, left blank)" : "");
        } else {
            double est, low, high;
            linear_predict(m, x, &est, &low, &high);
            int blank = 0, b2 = 0;
            if (estimate_formula(&fb, d, drop, &L, r, 0)) {
                st = error_nomem(err, NULL);
                goto out;
            }
            if (!isfinite(est))
                blank = 1;
            else if (fb.n <= FORMULA_CHARS_MAX)
                writer_formula(s, r, L.c_est, fb.s, est, WFMT_FIXED2);
            else   /* too long for spreadsheet programs to open */
                writer_number(s, r, L.c_est, est, WFMT_FIXED2, NULL);
            if (row->status == ROW_FITTED) {
                writer_cell_name(r, L.c_target, cell, sizeof cell);
                writer_cell_name(r, L.c_est, cell2, sizeof cell2);
                char rf[80];
                snprintf(rf, sizeof rf, "=%s-%s", cell, cell2);
                writer_formula(s, r, L.c_res, rf,
                               m->residual[row->index], WFMT_FIXED2);
            }
            writer_number(s, r, L.c_low, low, WFMT_FIXED2, &b2);
            writer_number(s, r, L.c_high, high, WFMT_FIXED2, &b2);
            /* solver gradient and a penalised fit have no intervals, by
             * design: no note for those */
            int no_interval = rm->gradient != NULL || rm->ridge > 0;
            snprintf(status, sizeof status, "%s%s",
                     row->status == ROW_FITTED ? "fitted" : "estimated",
                     blank ? " (estimate not finite, left blank)"
                     : b2 && m->df_resid > 0 && !no_interval
                         ? " (interval not finite, left blank)" : "");
        }
        if (rm->cv && row->status == ROW_FITTED)
            writer_number(s, r, L.c_cv, rm->cv->pred[row->index],
                          cls ? WFMT_FIXED4 : WFMT_FIXED2, NULL);
        writer_text(s, r, L.c_status, status, WFMT_NONE);
        for (size_t i = 0; i < d->n_inputs; i++) {
            const design_input *in = &d->inputs[i];
            uint16_t ci = (uint16_t)(L.c_input0 + i);
            if (in->is_category) {
                if (in->level[o])
                    writer_text(s, r, ci, in->level[o], WFMT_NONE);
            } else if (isfinite((double)in->value[o]) && in->derive >= 0) {
                /* a derived input is live: edit what it reads, and it and
                 * the estimate follow */
                char *text = derive_text(j, d, &L, (size_t)in->derive, r);
                if (text == NULL) {
                    st = error_nomem(err, NULL);
                    goto out;
                }
                writer_formula(s, r, ci, text, (double)in->value[o],
                               WFMT_NONE);
                free(text);
            } else if (isfinite((double)in->value[o])) {
                writer_number(s, r, ci, (double)in->value[o], WFMT_NONE,
                              NULL);
            }
        }
        for (size_t e = 0; e < L.n_extra; e++) {
            long ec = L.extra_col[row->source == SOURCE_DATA ? 0 : 1][e];
            if (ec >= 0)
                write_cell(s, r, (uint16_t)(L.c_extra0 + e), t, row->row,
                           (size_t)ec);
        }
    }
out:
    free(fb.s);
    free(L.extra);
    free(L.extra_col[0]);
    free(L.extra_col[1]);
    (void)warn;
    if (st)
        return st;
    return writer_status(w, err);
}

/* "dropped: collinear with living_area, (intercept)" */
static void drop_note(const design *d, const linear_drop *drop,
                      const size_t *with, const size_t *n_with, size_t k,
                      const long double *X, char *buf, size_t n)
{
    switch (drop[k]) {
    case LINEAR_KEPT:
        buf[0] = '\0';
        return;
    case LINEAR_DROP_ZERO:
        snprintf(buf, n, "dropped: zero in every fitted row, so it cannot "
                         "be estimated");
        return;
    case LINEAR_DROP_CONSTANT:
        snprintf(buf, n, "dropped: constant (%.15Lg in every fitted row), "
                         "so the intercept already covers it", X[k]);
        return;
    case LINEAR_DROP_COLLINEAR: {
        size_t used = (size_t)snprintf(buf, n, "dropped: collinear with ");
        for (size_t i = 0; i < n_with[k] && used < n; i++)
            used += (size_t)snprintf(buf + used, n - used, "%s%s",
                                     i ? ", " : "",
                                     d->term[with[k * LINEAR_WITH_MAX + i]]);
        if (used < n)
            snprintf(buf + used, n - used, " (it adds nothing they do not "
                                           "already give)");
        return;
    }
    }
}

/* The note of a kept term: which level a category term is compared with,
 * or why it has no standard error. */
static void kept_note(const design *d, const fit_result *rm,
                      size_t k, char *note, size_t n)
{
    note[0] = '\0';
    for (size_t i = 0; i < d->n_inputs; i++) {
        const design_input *in = &d->inputs[i];
        if (!in->is_category || k < in->first_term
            || k >= in->first_term + design_input_terms(in))
            continue;
        if (in->reference == DESIGN_NO_REFERENCE)
            snprintf(note, n, "no intercept: the level's own constant, not a "
                              "difference");
        else
            snprintf(note, n, "compared with the reference level '%s'",
                     in->levels[in->reference]);
    }
    const char *why = NULL;
    if (rm->ridge > 0)
        why = "penalised fit (ridge): the classical standard errors, p values "
              "and intervals do not apply, so they are left blank";
    else if (rm->gradient)
        why = "solver gradient gives no standard errors; solver exact does";
    else if (rm->linear && rm->linear->rss == 0)
        why = "exact fit: no residual variation, so no t or p value";
    if (why == NULL)
        return;
    size_t used = strlen(note);
    snprintf(note + used, n - used, "%s%s", used ? "; " : "", why);
}

static rf_status write_coefficients(writer *w, const design *d,
                                    const fit_result *rm, rf_error *err)
{
    writer_sheet *s = writer_add_sheet(w, "Coefficients", err);
    if (s == NULL)
        return err->status;
    const linear_model *m = rm->linear;
    const logistic_model *lm = rm->logistic;
    enum { C_TERM, C_EST, C_SE, C_STAT, C_P, C_LOW, C_HIGH, C_ODDS,
           C_ODDS_LOW, C_ODDS_HIGH, C_VIF, C_NOTE, C_ALL };
    static const char *const names[C_ALL] = {
        "term", "estimate", "std error", "t", "p value", "low", "high",
        "odds ratio", "odds low", "odds high", "vif", "note" };
    static const double widths[C_ALL] = { 24, 16, 14, 10, 10, 16, 16, 14, 14,
                                          14, 10, 60 };
    static const writer_format fmts[C_ALL] = {
        WFMT_NONE, WFMT_SIG, WFMT_SIG, WFMT_FIXED4, WFMT_PVALUE, WFMT_SIG,
        WFMT_SIG, WFMT_SIG, WFMT_SIG, WFMT_SIG, WFMT_FIXED2, WFMT_NONE };
    /* linear: up to high, vif, note; logistic: up to odds high (z for t),
     * note */
    int col[C_ALL], nc = 0;
    const char *shown[C_ALL];
    for (int c = 0; c < C_ALL; c++) {
        int on = c <= C_HIGH || c == C_NOTE
                 || (lm && c >= C_ODDS && c <= C_ODDS_HIGH)
                 || (c == C_VIF && rm->vif);
        col[c] = on ? nc : -1;
        if (on) {
            shown[nc] = c == C_STAT && lm ? "z" : names[c];
            writer_column(s, (uint16_t)nc, widths[c], fmts[c]);
            nc++;
        }
    }
    writer_header(s, shown, (size_t)nc, (uint32_t)d->p);
    const linear_drop *drop = m ? m->drop : lm->drop;
    const size_t *with = m ? m->with : lm->with;
    const size_t *n_with = m ? m->n_with : lm->n_with;
    char note[600];
    for (size_t k = 0; k < d->p; k++) {
        uint32_t r = (uint32_t)(k + 1);
        writer_text(s, r, 0, d->term[k], WFMT_NONE);
        drop_note(d, drop, with, n_with, k, d->X, note, sizeof note);
        if (drop[k] == LINEAR_KEPT) {
            double v[C_ALL] = {
                0, m ? m->beta[k] : lm->beta[k], m ? m->se[k] : lm->se[k],
                m ? m->t[k] : lm->z[k], m ? m->pvalue[k] : lm->pvalue[k],
                m ? m->low[k] : lm->low[k], m ? m->high[k] : lm->high[k],
                lm ? lm->odds[k] : NAN, lm ? lm->odds_low[k] : NAN,
                lm ? lm->odds_high[k] : NAN, rm->vif ? rm->vif[k] : NAN, 0 };
            for (int c = C_EST; c < C_NOTE; c++)
                if (col[c] >= 0)
                    writer_number(s, r, (uint16_t)col[c], v[c], fmts[c], NULL);
            kept_note(d, rm, k, note, sizeof note);
        }
        writer_text(s, r, (uint16_t)col[C_NOTE], note, WFMT_NONE);
    }
    return writer_status(w, err);
}

/* One Summary row. */
static void srow(writer_sheet *s, uint32_t *r, const char *measure, double v,
                 writer_format fmt, const char *note)
{
    writer_text(s, *r, 0, measure, WFMT_NONE);
    int blank = 0;
    writer_number(s, *r, 1, v, fmt, &blank);
    if (note)
        writer_text(s, *r, 2, note, WFMT_NONE);
    else if (blank)
        writer_text(s, *r, 2, "not defined for this fit", WFMT_NONE);
    (*r)++;
}

static void trow(writer_sheet *s, uint32_t *r, const char *measure,
                 const char *v, const char *note)
{
    writer_text(s, *r, 0, measure, WFMT_NONE);
    writer_text(s, *r, 1, v, WFMT_NONE);
    if (note)
        writer_text(s, *r, 2, note, WFMT_WRAP);
    (*r)++;
}

/* Said of a measure whose classical degrees of freedom a penalty changes. */
#define PENALISED "not defined for a penalised fit (ridge): its degrees of " \
                  "freedom are not the count of terms"

/* The rows of a linear fit. */
static void summary_linear(writer_sheet *s, uint32_t *r, const design *d,
                           const fit_result *rm)
{
    char note[300];
    const linear_model *m = rm->linear;
    int gradient = rm->gradient != NULL;
    int pen = rm->ridge > 0;
    srow(s, r, "r squared", m->r2, WFMT_SIG,
         d->intercept ? NULL : "uncentred (no intercept): 1 - RSS / sum of y squared");
    srow(s, r, "adjusted r squared", pen ? NAN : m->adj_r2, WFMT_SIG,
         pen ? PENALISED : NULL);
    srow(s, r, "residual std error", m->sigma, WFMT_SIG, "sqrt(RSS / residual df)");
    srow(s, r, "rmse", m->rmse, WFMT_SIG, "sqrt(RSS / rows fitted)");
    srow(s, r, "mae", m->mae, WFMT_SIG, "mean absolute residual");
    srow(s, r, "f statistic", pen ? NAN : m->fstat, WFMT_SIG, pen ? PENALISED
         : isinf(m->fstat) ? "infinite: the fit is exact" : NULL);
    srow(s, r, "f p value", pen ? NAN : m->fpvalue, WFMT_PVALUE,
         pen ? PENALISED
         : isinf(m->fstat) ? "not defined: the fit is exact" : NULL);
    srow(s, r, "residual df", m->df_resid, WFMT_INTEGER, NULL);
    srow(s, r, "aic", pen ? NAN : m->aic, WFMT_SIG, pen ? PENALISED
         : isfinite(m->aic) ? "-2 log likelihood + 2 (terms estimated + 1)"
                            : "not defined: the residuals are all zero");
    srow(s, r, "bic", pen ? NAN : m->bic, WFMT_SIG, pen ? PENALISED
         : isfinite(m->bic)
             ? "-2 log likelihood + ln(rows fitted) (terms estimated + 1)"
             : "not defined: the residuals are all zero");
    srow(s, r, "level", m->level, WFMT_PERCENT, gradient || pen
         ? "confidence level (this fit gives no intervals)"
         : "confidence level of every low / high");
    snprintf(note, sizeof note,
             "of the inputs after scaling each to unit length; a term is "
             "dropped below a relative size of %.0e", m->rank_tol);
    srow(s, r, "condition number", m->cond, WFMT_SCI, note);
    int digits = linear_accurate_digits(m);
    snprintf(note, sizeof note, "%s", m->refine_converged
             ? "correct significant digits to expect in the exact solver's "
               "estimates, from the condition number and extended-precision "
               "refinement"
             : "refinement did not converge: the design is too "
               "ill-conditioned for full accuracy");
    srow(s, r, "accurate digits", digits, WFMT_INTEGER, note);
}

/* The rows of a logistic fit. */
static void summary_logistic(writer_sheet *s, uint32_t *r,
                             const design *d, const fit_result *rm)
{
    const logistic_model *m = rm->logistic;
    const classify_measures *c = rm->cm;
    char note[300];
    snprintf(note, sizeof note, "the event: probability is of this value "
             "(%zu of the fitted rows; the other value, '%s', %zu)",
             d->n_positive, d->negative, d->n_negative);
    trow(s, r, "positive class", d->positive, note);
    srow(s, r, "log likelihood", m->loglik, WFMT_SIG,
         rm->ridge > 0 ? "of the penalised estimates, without the penalty"
                      : NULL);
    srow(s, r, "null deviance", m->null_deviance, WFMT_SIG, d->intercept
         ? "-2 log likelihood of the intercept-only model"
         : "-2 log likelihood of probability 0.5 for every row");
    srow(s, r, "residual deviance", m->deviance, WFMT_SIG,
         "-2 log likelihood");
    int pen = rm->ridge > 0;
    srow(s, r, "aic", pen ? NAN : m->aic, WFMT_SIG, pen ? PENALISED
         : "residual deviance + 2 (terms estimated)");
    srow(s, r, "bic", pen ? NAN : m->bic, WFMT_SIG, pen ? PENALISED
         : "residual deviance + ln(rows fitted) (terms estimated)");
    srow(s, r, "mcfadden r squared", m->mcfadden, WFMT_SIG,
         "1 - log likelihood / null log likelihood");
    snprintf(note, sizeof note, "share of fitted rows whose predicted label "
             "(probability at or above %g) is their class", c->threshold);
    srow(s, r, "accuracy", c->accuracy, WFMT_SIG, note);
    srow(s, r, "precision", c->precision, WFMT_SIG, isnan(c->precision)
         ? "not defined: no row is predicted positive"
         : "of the rows predicted positive, the share that are");
    srow(s, r, "recall", c->recall, WFMT_SIG,
         "of the positive rows, the share predicted positive");
    srow(s, r, "auc", c->auc, WFMT_SIG,
         "area under the ROC curve: the chance that a positive row gets a "
         "higher probability than a negative one (ties count one half)");
    srow(s, r, "brier score", c->brier, WFMT_SIG,
         "mean of (probability - outcome)^2, outcome 1 or 0");
    srow(s, r, "log loss", c->logloss, WFMT_SIG,
         "mean of -ln(probability given to the observed class), "
         "probabilities clipped to [1e-15, 1 - 1e-15]");
    if (c->hl_groups >= 3)
        snprintf(note, sizeof note, "Hosmer-Lemeshow chi-squared over %d "
                 "groups of rows by predicted risk (deciles, ties kept "
                 "together), %d df; a small p value says the probabilities "
                 "do not match the observed rates", c->hl_groups, c->hl_df);
    else
        snprintf(note, sizeof note, "not defined: fewer than 3 risk groups");
    srow(s, r, "hosmer-lemeshow", c->hl_stat, WFMT_SIG, note);
    srow(s, r, "hosmer-lemeshow p value", c->hl_pvalue, WFMT_PVALUE,
         c->hl_groups >= 3 ? "chi-squared upper tail"
                           : "not defined: fewer than 3 risk groups");
    if (rm->gradient)
        srow(s, r, "iterations", (double)rm->gradient->iterations,
             WFMT_INTEGER, "epochs of gradient descent");
    else
        srow(s, r, "iterations", m->iterations, WFMT_INTEGER,
             "Newton (IRLS) steps; converged when the deviance changes by "
             "under 1e-12 relative and the largest step is under 1e-10");
    srow(s, r, "threshold", c->threshold, WFMT_SIG, "probability at or above "
         "which a row is predicted positive");
    srow(s, r, "level", m->level, WFMT_PERCENT, rm->gradient || rm->ridge > 0
         ? "confidence level (this fit gives no intervals)"
         : "confidence level of every low / high");
}

/* The rows of solver gradient. */
static void summary_gradient(writer_sheet *s, uint32_t *r,
                             const fit_result *rm)
{
    const gradient_model *g = rm->gradient;
    char note[300];
    trow(s, r, "solver", "gradient", "batch gradient descent on standardized "
         "inputs; coefficients reported on the original scale");
    if (rm->linear)
        srow(s, r, "iterations", (double)g->iterations, WFMT_INTEGER,
             "epochs of gradient descent");
    snprintf(note, sizeof note, "%s (last epoch lowered the cost by %.2g of "
             "itself; cap %ld epochs)", gradient_stop_str(g->stop),
             g->last_drop, g->epochs);
    trow(s, r, "stopped", g->converged ? "converged" : "not converged", note);
    srow(s, r, "final cost", g->cost, WFMT_SIG, g->logistic
         ? "mean log loss (+ penalty / rows) at the last epoch"
         : "mean squared error / 2 (+ penalty / rows) at the last epoch");
    srow(s, r, "rate", g->rate, WFMT_SIG, "step size on the standardized "
         "scale (1 / Lipschitz constant of the gradient unless the job sets "
         "rate)");
    srow(s, r, "agreement with exact", rm->agree_digits, WFMT_SIG,
         "significant digits shared with solver exact's coefficients for "
         "the same problem (the worst term)");
}

/* The cross-validation rows: the folds and the three pooled measures. */
static void summary_cv(writer_sheet *s, uint32_t *r, const fit_result *rm)
{
    const fit_cv *cv = rm->cv;
    const validate_result *v = cv->res;
    char note[300];
    snprintf(note, sizeof note, "k-fold cross-validation: folds drawn with "
             "seed %lu%s; each fold's rows estimated by a fit to the other "
             "rows (see the Validation sheet)", cv->seed,
             cv->stratified ? ", stratified by class" : "");
    srow(s, r, "folds", (double)cv->k, WFMT_INTEGER, note);
    static const char *const lin[] = { "cv rmse", "cv mae", "cv r squared" };
    static const char *const cls[] = { "cv accuracy", "cv auc",
                                       "cv log loss" };
    static const char *const lin_note[] = {
        "root mean square of the out-of-fold errors, over every fitted row",
        "mean absolute out-of-fold error, over every fitted row",
        ("1 - (sum of squared out-of-fold errors) / (sum of squares about "
         "the mean target)") };
    static const char *const cls_note[] = {
        "share of fitted rows whose out-of-fold label is their class",
        "AUC of the out-of-fold probabilities, every fitted row",
        "mean log loss of the out-of-fold probabilities" };
    if (v && cv->failed) {
        size_t used = 0;
        for (size_t f = 0; f < v->k; f++)
            used += v->folds[f].rows;
        snprintf(note, sizeof note, "over the %zu fitted rows whose fold "
                 "could be fitted (%zu of %zu folds failed: see the "
                 "Validation sheet)", used, cv->failed, cv->k);
        for (int k = 0; k < VALIDATE_MEASURES; k++)
            srow(s, r, (rm->classify ? cls : lin)[k], v->pooled[k],
                 WFMT_SIG, note);
        return;
    }
    for (int k = 0; k < VALIDATE_MEASURES; k++)
        srow(s, r, (rm->classify ? cls : lin)[k], v ? v->pooled[k] : NAN,
             WFMT_SIG,
             v ? (rm->classify ? cls_note : lin_note)[k]
               : "not measured: fewer than two folds could be fitted");
}

/* A small labelled 2x2 block: rows the observed class, columns the
 * predicted one. */
static void confusion_block(writer_sheet *s, uint32_t *r, const design *d,
                            const classify_measures *c, const char *rows)
{
    char head[300];
    snprintf(head, sizeof head, "confusion matrix (%s, threshold %g)", rows,
             c->threshold);
    writer_text(s, *r, 0, head, WFMT_BOLD);
    (*r)++;
    snprintf(head, sizeof head, "predicted %s", d->positive);
    writer_text(s, *r, 1, head, WFMT_BOLD);
    snprintf(head, sizeof head, "predicted %s", d->negative);
    writer_text(s, *r, 2, head, WFMT_BOLD);
    (*r)++;
    snprintf(head, sizeof head, "observed %s", d->positive);
    writer_text(s, *r, 0, head, WFMT_BOLD);
    writer_number(s, *r, 1, (double)c->tp, WFMT_INTEGER, NULL);
    writer_number(s, *r, 2, (double)c->fn, WFMT_INTEGER, NULL);
    (*r)++;
    snprintf(head, sizeof head, "observed %s", d->negative);
    writer_text(s, *r, 0, head, WFMT_BOLD);
    writer_number(s, *r, 1, (double)c->fp, WFMT_INTEGER, NULL);
    writer_number(s, *r, 2, (double)c->tn, WFMT_INTEGER, NULL);
    (*r)++;
}

/* Line r (1-based) of the Weights sheet's standardizing block: a header,
 * then each input unit's design column with its mean and scale, then the
 * target's. */
static void weights_std_line(writer_sheet *s, uint32_t r, const design *d,
                             const network_model *net)
{
    size_t k = r - 1;
    if (k < net->units[0]) {
        writer_text(s, r, 5, d->term[net->col[k]], WFMT_NONE);
        writer_number(s, r, 6, net->in_mean[k], WFMT_SIG, NULL);
        writer_number(s, r, 7, net->in_scale[k], WFMT_SIG, NULL);
        if (k == 0)
            writer_text(s, r, 8, "a unit's input is (value - mean) / scale, "
                        "over the training rows; a unit computes TANH(bias + "
                        "sum of weight x input)", WFMT_NONE);
    } else if (k == net->units[0]) {
        writer_text(s, r, 5, "(target)", WFMT_NONE);
        writer_number(s, r, 6, net->y_mean, WFMT_SIG, NULL);
        writer_number(s, r, 7, net->y_scale, WFMT_SIG, NULL);
        writer_text(s, r, 8, net->classify
                    ? "yes/no target: the output is 1 / (1 + EXP(-(bias + "
                      "sum of weight x unit)))"
                    : "the estimate is mean + scale x (bias + sum of weight "
                      "x unit)", WFMT_NONE);
    }
}

/* Every model's first rows (SUMMARY_COMMON of them). */
static void summary_common(writer_sheet *s, uint32_t *r, const job *j,
                           const table *data, const table *score,
                           const design *d, const char *model_note,
                           const char *terms_note)
{
    size_t nread = table_rows(data) + (score ? table_rows(score) : 0);
    trow(s, r, "model", job_model_name(j->model), model_note);
    trow(s, r, "target", j->target.name, NULL);
    srow(s, r, "rows read", (double)nread, WFMT_INTEGER, NULL);
    srow(s, r, "rows fitted", (double)d->n_fit, WFMT_INTEGER, NULL);
    srow(s, r, "rows skipped", (double)d->rows_skipped, WFMT_INTEGER,
         d->rows_skipped ? "each skipped row's reason is in its Estimates status"
                         : NULL);
    srow(s, r, "rows estimated", (double)d->n_est, WFMT_INTEGER,
         "rows with a blank target, and rows of the score table");
    srow(s, r, "terms", (double)d->p, WFMT_INTEGER, terms_note);
}

/* The Summary of a network: the common rows, its measures (those of a
 * linear or logistic model that a network has), how it trained, the cv
 * rows, then each input's permutation importance. */
#define SUMMARY_NET_TRAIN 8
#define SUMMARY_NET_NUMERIC 3
#define SUMMARY_NET_CLASSIFY 8
static rf_status write_summary_network(writer *w, const job *j,
                                       const table *data, const table *score,
                                       const design *d, const fit_result *rm,
                                       rf_error *err)
{
    const network_model *net = rm->network;
    const classify_measures *c = rm->cm;
    writer_sheet *s = writer_add_sheet(w, "Summary", err);
    if (s == NULL)
        return err->status;
    static const char *const names[] = { "measure", "value", "note" };
    writer_column(s, 0, 26, WFMT_NONE);
    writer_column(s, 1, 20, WFMT_SIG);
    writer_column(s, 2, 80, WFMT_NONE);
    uint32_t measures = SUMMARY_COMMON + SUMMARY_NET_TRAIN
        + (rm->classify ? SUMMARY_NET_CLASSIFY : SUMMARY_NET_NUMERIC)
        + (rm->ridge > 0 ? 1 : 0) + (rm->cv ? SUMMARY_CV : 0);
    writer_header(s, names, 3, measures);
    uint32_t r = 1;
    char note[300], text[80];
    snprintf(note, sizeof note, "%zu input columns reach the network "
             "(categories as indicator columns; constant columns, the "
             "intercept among them, carry nothing)", net->units[0]);
    summary_common(s, &r, j, data, score, d, rm->classify
                   ? "multilayer perceptron, tanh units, logistic output, "
                     "log loss"
                   : "multilayer perceptron, tanh units, linear output, "
                     "squared error", note);
    size_t used = 0;
    text[0] = '\0';
    for (size_t l = 0; l + 1 < net->n_layers; l++)
        used += (size_t)snprintf(text + used, sizeof text - used, "%s%zu",
                                 l ? ", " : "", net->units[l + 1]);
    trow(s, &r, "hidden", text, "units per hidden layer");
    srow(s, &r, "weights", (double)network_weights(net), WFMT_INTEGER,
         "weights and biases learned");
    if (net->solver == NETWORK_LBFGS)
        snprintf(note, sizeof note, "full-batch L-BFGS (quasi-Newton)");
    else
        snprintf(note, sizeof note, "mini-batch Adam, the rows dealt at "
                 "random into batches of about %zu rows every epoch",
                 net->batch);
    trow(s, &r, "solver", network_solver_str(net->solver), note);
    srow(s, &r, "epochs", (double)net->epochs, WFMT_INTEGER,
         net->solver == NETWORK_LBFGS ? "L-BFGS iterations of the kept "
         "restart" : "epochs of the kept restart");
    snprintf(note, sizeof note, "%s (cap %ld)", network_stop_str(net->stop),
             net->epochs_cap);
    trow(s, &r, "stopped", net->stop == NETWORK_EPOCHS ? "at the cap"
                           : net->stop == NETWORK_EARLY_STOP ? "early"
                                                             : "converged",
         note);
    srow(s, &r, "training loss", net->train_loss, WFMT_SIG, rm->classify
         ? "mean log loss on the training rows"
         : "mean squared error on the training rows, in the target's units "
           "squared");
    snprintf(note, sizeof note, "the same on the %zu rows held out for "
             "early stopping", net->n_holdout);
    srow(s, &r, "validation loss", net->valid_loss, WFMT_SIG, note);
    snprintf(note, sizeof note, "starts from different seeds; the kept one "
             "(number %zu) has the lowest validation loss",
             net->restart_best + 1);
    srow(s, &r, "restarts", (double)net->restarts, WFMT_INTEGER, note);
    if (rm->classify) {
        snprintf(note, sizeof note, "the event (%zu of the fitted rows; the "
                 "other value, '%s', %zu)", d->n_positive, d->negative,
                 d->n_negative);
        trow(s, &r, "positive class", d->positive, note);
        srow(s, &r, "accuracy", c->accuracy, WFMT_SIG, "fitted rows, at the "
             "threshold");
        srow(s, &r, "precision", c->precision, WFMT_SIG, NULL);
        srow(s, &r, "recall", c->recall, WFMT_SIG, NULL);
        srow(s, &r, "auc", c->auc, WFMT_SIG, "area under the ROC curve, "
             "fitted rows");
        srow(s, &r, "brier score", c->brier, WFMT_SIG, NULL);
        srow(s, &r, "log loss", c->logloss, WFMT_SIG, NULL);
        srow(s, &r, "threshold", c->threshold, WFMT_SIG, "probability at or "
             "above which a row is predicted positive");
    } else {
        srow(s, &r, "r squared", rm->r2, WFMT_SIG, "fitted rows: 1 - RSS / "
             "sum of squares about the mean");
        srow(s, &r, "rmse", rm->rmse, WFMT_SIG, "fitted rows");
        srow(s, &r, "mae", rm->mae, WFMT_SIG, "fitted rows");
    }
    if (rm->ridge > 0)
        srow(s, &r, "ridge", rm->ridge, WFMT_SIG, "weight decay: (ridge / "
             "2) x the sum of squared weights (not biases), on standardized "
             "inputs");
    if (rm->cv)
        summary_cv(s, &r, rm);
    assert(r - 1 == measures);
    r++;
    writer_text(s, r, 0, "input", WFMT_BOLD);
    writer_text(s, r, 1, "importance", WFMT_BOLD);
    writer_text(s, r++, 2, rm->classify
                ? "increase of the held-out log loss when the input's values "
                  "are shuffled among the held-out rows (mean of 5 shuffles): "
                  "what the network relies on, not a causal effect"
                : "increase of the held-out mean squared error when the "
                  "input's values are shuffled among the held-out rows "
                  "(mean of 5 shuffles): what the network relies on, not a "
                  "causal effect", WFMT_WRAP);
    for (size_t k = 0; k < d->n_inputs; k++, r++) {
        writer_text(s, r, 0, d->inputs[k].name, WFMT_NONE);
        writer_number(s, r, 1, rm->importance[k], WFMT_SIG, NULL);
    }
    r++;
    if (rm->classify) {
        confusion_block(s, &r, d, c, "fitted rows");
        r++;
        trow(s, &r, "caution", "scoring people", CAUTION_PEOPLE);
    } else {
        trow(s, &r, "caution", "an estimate is not an appraisal",
             CAUTION_PRICE);
    }
    return writer_status(w, err);
}

/* The Weights sheet: every weight of the network, layer by layer, and the
 * standardizing of its inputs and target, so that its estimates can be
 * recomputed by hand or in a sheet. */
static rf_status write_weights(writer *w, const design *d,
                               const fit_result *rm, rf_error *err)
{
    const network_model *net = rm->network;
    writer_sheet *s = writer_add_sheet(w, "Weights", err);
    if (s == NULL)
        return err->status;
    static const char *const names[] = { "layer", "from", "to", "weight" };
    writer_column(s, 0, 8, WFMT_INTEGER);
    writer_column(s, 1, 28, WFMT_NONE);
    writer_column(s, 2, 14, WFMT_NONE);
    writer_column(s, 3, 16, WFMT_SIG);
    writer_column(s, 5, 28, WFMT_NONE);
    writer_column(s, 6, 16, WFMT_SIG);
    writer_column(s, 7, 16, WFMT_SIG);
    writer_column(s, 8, 60, WFMT_NONE);
    size_t rows = 0;
    for (size_t l = 0; l < net->n_layers; l++)
        rows += net->units[l + 1] * (net->units[l] + 1);
    writer_header(s, names, 4, (uint32_t)rows);
    writer_text(s, 0, 5, "input", WFMT_BOLD);
    writer_text(s, 0, 6, "mean", WFMT_BOLD);
    writer_text(s, 0, 7, "scale", WFMT_BOLD);
    writer_text(s, 0, 8, "note", WFMT_BOLD);
    /* the standardizing, beside the weights: written with the rows it
     * sits beside (the sheet is streamed in row order) */
    size_t std_rows = net->units[0] + 2;
    uint32_t r = 1;
    char from[96], to[48];
    for (size_t l = 0; l < net->n_layers; l++) {
        size_t nin = net->units[l], nout = net->units[l + 1];
        for (size_t o = 0; o < nout; o++) {
            if (l + 1 == net->n_layers)
                snprintf(to, sizeof to, "output");
            else
                snprintf(to, sizeof to, "h%zu.%zu", l + 1, o + 1);
            for (size_t i = 0; i <= nin; i++, r++) {
                if (i == nin)
                    snprintf(from, sizeof from, "bias");
                else if (l == 0)
                    snprintf(from, sizeof from, "%s", d->term[net->col[i]]);
                else
                    snprintf(from, sizeof from, "h%zu.%zu", l, i + 1);
                writer_number(s, r, 0, (double)(l + 1), WFMT_INTEGER, NULL);
                writer_text(s, r, 1, from, WFMT_NONE);
                writer_text(s, r, 2, to, WFMT_NONE);
                writer_number(s, r, 3, i == nin ? net->b[l][o]
                                                : net->W[l][o * nin + i],
                              WFMT_SIG, NULL);
                if (r - 1 < std_rows)
                    weights_std_line(s, r, d, net);
            }
        }
    }
    for (; r - 1 < std_rows; r++)
        weights_std_line(s, r, d, net);
    return writer_status(w, err);
}

static rf_status write_summary(writer *w, const job *j, const table *data,
                               const table *score, const design *d,
                               const fit_result *rm, rf_error *err)
{
    writer_sheet *s = writer_add_sheet(w, "Summary", err);
    if (s == NULL)
        return err->status;
    const linear_model *m = rm->linear;
    const logistic_model *lm = rm->logistic;
    static const char *const names[] = { "measure", "value", "note" };
    writer_column(s, 0, 26, WFMT_NONE);
    writer_column(s, 1, 20, WFMT_SIG);
    writer_column(s, 2, 80, WFMT_NONE);
    uint32_t measures = SUMMARY_COMMON
        + (m ? SUMMARY_LINEAR : SUMMARY_LOGISTIC)
        + (rm->gradient ? SUMMARY_GRADIENT + (m ? 1 : 0) : 0)
        + (rm->ridge > 0 || j->ridge_auto ? 1 : 0)
        + (rm->cv ? SUMMARY_CV : 0);
    writer_header(s, names, 3, measures);
    uint32_t r = 1;
    char note[300];
    size_t rank = m ? m->rank : lm->rank;
    size_t ndropped = d->p - rank;
    snprintf(note, sizeof note, ndropped ? "%zu estimated; %zu dropped (see "
                                           "Coefficients)" : "%zu estimated",
             rank, ndropped);
    summary_common(s, &r, j, data, score, d,
                   rm->gradient ? (m ? "least squares by gradient descent"
                                     : "maximum likelihood by gradient "
                                       "descent")
                   : m ? "ordinary least squares"
                       : "maximum likelihood by Newton's method (IRLS)",
                   note);
    if (m)
        summary_linear(s, &r, d, rm);
    else
        summary_logistic(s, &r, d, rm);
    if (rm->ridge > 0 || j->ridge_auto) {
        const char *what = m ? "the penalty ridge x (sum of squared "
                               "coefficients of the standardized inputs) "
                               "added to the residual sum of squares"
                             : "the penalty (ridge / 2) x (sum of squared "
                               "coefficients of the standardized inputs) "
                               "taken from the log likelihood";
        snprintf(note, sizeof note, "%s%s; the intercept is not penalised",
                 j->ridge_auto ? "chosen by cross-validation (the "
                                 "smallest penalty within 0.1% of the "
                                 "smallest cv error; the path is on the "
                                 "Validation sheet): " : "", what);
        srow(s, &r, "ridge", rm->ridge, WFMT_SIG, note);
    }
    if (rm->cv)
        summary_cv(s, &r, rm);
    if (rm->gradient)
        summary_gradient(s, &r, rm);
    assert(r - 1 == measures);  /* the autofilter covers them all */
    r++;
    if (lm) {
        confusion_block(s, &r, d, rm->cm, "fitted rows");
        r++;
        trow(s, &r, "caution", "scoring people", CAUTION_PEOPLE);
        return writer_status(w, err);
    }
    trow(s, &r, "caution", "an estimate is not an appraisal", CAUTION_PRICE);
    /* Two charts over the Estimates columns: target against estimate (a
     * good fit lies on the diagonal) and residual against estimate (a good
     * fit shows no pattern). Capped, because a spreadsheet program slows
     * to a crawl drawing a million points. */
    int has_id = j->id.name != NULL;
    uint16_t c_target = (uint16_t)(has_id ? 3 : 2);
    size_t last = d->n_rows < CHART_POINTS_MAX ? d->n_rows : CHART_POINTS_MAX;
    char ct[8], ce[8], cr[8], xr[64], yr[64], rr[64], title[96];
    col_name(c_target, ct, sizeof ct);
    col_name((uint16_t)(c_target + 1), ce, sizeof ce);
    col_name((uint16_t)(c_target + 2), cr, sizeof cr);
    snprintf(xr, sizeof xr, "=Estimates!$%s$2:$%s$%zu", ce, ce, last + 1);
    snprintf(yr, sizeof yr, "=Estimates!$%s$2:$%s$%zu", ct, ct, last + 1);
    snprintf(rr, sizeof rr, "=Estimates!$%s$2:$%s$%zu", cr, cr, last + 1);
    const char *cap = last < d->n_rows ? " (first rows)" : "";
    snprintf(title, sizeof title, "%s against estimate%s", j->target.name,
             cap);
    writer_scatter(s, 1, 4, title, "estimate", xr, j->target.name, yr);
    snprintf(title, sizeof title, "residual against estimate%s", cap);
    writer_scatter(s, 17, 4, title, "estimate", xr, "residual", rr);
    return writer_status(w, err);
}

/* The Validation sheet: each fold's measures, their mean and spread, how
 * the folds were fitted; the ridge path; for a yes/no target the
 * calibration table and the out-of-fold confusion matrix. */
static rf_status write_validation(writer *w, const design *d,
                                  const fit_result *rm, rf_error *err)
{
    const fit_cv *cv = rm->cv;
    const validate_result *v = cv->res;
    writer_sheet *s = writer_add_sheet(w, "Validation", err);
    if (s == NULL)
        return err->status;
    int cls = rm->classify;
    const char *names[6] = { "fold", "rows", cls ? "accuracy" : "rmse",
                             cls ? "auc" : "mae",
                             cls ? "log loss" : "r squared", "note" };
    writer_column(s, 0, 20, WFMT_NONE);
    for (uint16_t c = 1; c < 5; c++)
        writer_column(s, c, 16, WFMT_SIG);
    writer_column(s, 5, 70, WFMT_NONE);
    writer_header(s, names, 6, v ? (uint32_t)v->k : 0);
    uint32_t r = 1;
    char note[400];
    if (v) {
        for (size_t f = 0; f < v->k; f++, r++) {
            writer_number(s, r, 0, (double)(cv->fold_id[f] + 1),
                          WFMT_INTEGER, NULL);
            writer_number(s, r, 1, (double)v->folds[f].rows, WFMT_INTEGER,
                          NULL);
            for (int k = 0; k < VALIDATE_MEASURES; k++)
                writer_number(s, r, (uint16_t)(2 + k), v->folds[f].m[k],
                              WFMT_SIG, NULL);
            if (!cls && isnan(v->folds[f].m[VALIDATE_R2]))
                writer_text(s, r, 5, "r squared not defined: the fold's "
                            "targets are all equal", WFMT_NONE);
            else if (cls && isnan(v->folds[f].m[VALIDATE_AUC]))
                writer_text(s, r, 5, "auc not defined: the fold holds one "
                            "class only", WFMT_NONE);
        }
        static const char *const what[3] = { "mean", "sd", "all rows" };
        static const char *const why[3] = {
            "mean over the folds where the measure is defined",
            "standard deviation over the folds (divisor folds - 1)",
            ("every fitted row's out-of-fold value at once (Summary's cv "
             "measures)") };
        for (int a = 0; a < 3; a++, r++) {
            writer_text(s, r, 0, what[a], WFMT_BOLD);
            for (int k = 0; k < VALIDATE_MEASURES; k++)
                writer_number(s, r, (uint16_t)(2 + k),
                              a == 0 ? v->mean[k] : a == 1 ? v->sd[k]
                                                           : v->pooled[k],
                              WFMT_SIG, NULL);
            if (a == 2) {
                size_t used = 0;
                for (size_t f = 0; f < v->k; f++)
                    used += v->folds[f].rows;
                writer_number(s, r, 1, (double)used, WFMT_INTEGER, NULL);
            }
            writer_text(s, r, 5, why[a], WFMT_NONE);
        }
    } else {
        writer_text(s, r++, 0, "not measured: fewer than two folds could be "
                    "fitted", WFMT_NONE);
    }
    r++;
    if (cv->k == d->n_fit)
        snprintf(note, sizeof note, "leave-one-out: each fitted row its own "
                 "fold; %s. What a fit learns from its rows (the "
                 "coefficients, the standardizing of a penalty%s) is learned "
                 "from each fold's training rows only.", cv->method,
                 cv->G ? ", the ridge choice" : "");
    else
        snprintf(note, sizeof note, "%zu folds drawn with seed %lu%s; %s. "
                 "What a fit learns from its rows (the coefficients, the "
                 "standardizing of a penalty%s) is learned from each fold's "
                 "training rows only.", cv->k, cv->seed,
                 cv->stratified ? ", stratified by class" : "", cv->method,
                 cv->G ? ", the ridge choice" : "");
    writer_text(s, r, 0, "method", WFMT_BOLD);
    writer_text(s, r++, 1, note, WFMT_NONE);
    if (cv->refits) {
        snprintf(note, sizeof note, "%zu fold%s refitted from scratch: "
                 "%s training rows cannot estimate every term (a category "
                 "level seen only in the fold), so the terms they cannot "
                 "estimate are left out of that fold's fit",
                 cv->refits, cv->refits == 1 ? "" : "s",
                 cv->refits == 1 ? "its" : "their");
        writer_text(s, r++, 1, note, WFMT_NONE);
    }
    if (cv->failed) {
        snprintf(note, sizeof note, "%zu fold%s could not be fitted (the "
                 "classes are separated within the training rows); their "
                 "rows have no out-of-fold value and are left out of the "
                 "measures", cv->failed, cv->failed == 1 ? "" : "s");
        writer_text(s, r++, 1, note, WFMT_NONE);
    }
    r++;
    if (cv->G) {
        writer_text(s, r, 0, "ridge path", WFMT_BOLD);
        writer_text(s, r, 1, cls ? "cv log loss" : "cv mse", WFMT_BOLD);
        writer_text(s, r, 2, "standard error", WFMT_BOLD);
        writer_text(s, r++, 5, "the mean over the folds of each fold's "
                    "error, and its standard error (sd / sqrt(folds)); the "
                    "chosen penalty is the smallest whose error is within "
                    "0.1% of the smallest: a penalty only where it lowers "
                    "the cross-validated error", WFMT_NONE);
        for (size_t g = 0; g < cv->G; g++, r++) {
            writer_number(s, r, 0, cv->grid[g], WFMT_SIG, NULL);
            writer_number(s, r, 1, cv->mean[g], WFMT_SIG, NULL);
            writer_number(s, r, 2, cv->se[g], WFMT_SIG, NULL);
            if (g == cv->chosen || g == cv->best)
                writer_text(s, r, 5, g == cv->chosen && g == cv->best
                            ? "chosen (also the smallest error)"
                            : g == cv->chosen ? "chosen"
                                              : "smallest error", WFMT_BOLD);
        }
        r++;
    }
    if (cls && cv->cal) {
        const validate_calibration *c = cv->cal;
        static const char *const head[6] = {
            "risk group", "rows", "mean probability", "observed rate",
            "lowest probability", "highest probability" };
        uint32_t top = r;
        for (uint16_t k = 0; k < 6; k++)
            writer_text(s, r, k, head[k], WFMT_BOLD);
        r++;
        for (size_t g = 0; g < c->groups; g++, r++) {
            writer_number(s, r, 0, (double)(g + 1), WFMT_INTEGER, NULL);
            writer_number(s, r, 1, (double)c->rows[g], WFMT_INTEGER, NULL);
            writer_number(s, r, 2, c->mean_p[g], WFMT_SIG, NULL);
            writer_number(s, r, 3, c->rate[g], WFMT_SIG, NULL);
            writer_number(s, r, 4, c->p_low[g], WFMT_SIG, NULL);
            writer_number(s, r, 5, c->p_high[g], WFMT_SIG, NULL);
        }
        writer_text(s, r++, 0, "calibration: out-of-fold probabilities in "
                    "groups by predicted risk (deciles, ties kept "
                    "together); a well calibrated model's observed rate "
                    "follows its mean probability", WFMT_NONE);
        char xr[64], yr[64];
        snprintf(xr, sizeof xr, "=Validation!$C$%u:$C$%zu", top + 2,
                 top + 1 + c->groups);
        snprintf(yr, sizeof yr, "=Validation!$D$%u:$D$%zu", top + 2,
                 top + 1 + c->groups);
        writer_scatter(s, top, 7, "observed rate against mean probability "
                       "(out of fold)", "mean probability", xr,
                       "observed rate", yr);
        r++;
        if (v)
            confusion_block(s, &r, d, &v->all, "out-of-fold probabilities");
    }
    return writer_status(w, err);
}

/* Line k (1..THRESH_LINES) of the Diagnostics sheet's threshold block,
 * at sheet row k, columns from ct. */
#define THRESH_LINES 5
static void thresh_line(writer_sheet *s, uint32_t k, uint16_t ct,
                        const diagnose_result *g, int lg, int penalised)
{
    static const char *const flag[3] = { "high leverage", "outlier",
                                         "influential" };
    char note[300];
    if (k >= 1 && k <= 3) {
        const double cut[3] = { g->leverage_cut, g->student_cut,
                                g->cooks_cut };
        writer_text(s, k, ct, flag[k - 1], WFMT_NONE);
        writer_number(s, k, (uint16_t)(ct + 1), cut[k - 1], WFMT_SIG, NULL);
        writer_number(s, k, (uint16_t)(ct + 2), (double)g->n_flagged[k - 1],
                      WFMT_INTEGER, NULL);
        if (k == 1)
            snprintf(note, sizeof note, "leverage above 2p/n = 2 x %zu / %zu",
                     g->p, g->n);
        else if (k == 2)
            snprintf(note, sizeof note, "%s", lg
                     ? "|standardized Pearson residual| above 3"
                     : "|externally studentized residual| above 3");
        else
            snprintf(note, sizeof note, "Cook's distance above 4/n = 4 / %zu",
                     g->n);
        writer_text(s, k, (uint16_t)(ct + 3), note, WFMT_NONE);
    } else if (k == THRESH_LINES) {
        writer_text(s, k, ct, penalised
                    ? "A flag asks for a second look at the row (a typing "
                      "error, an unusual case), not for its removal. With a "
                      "penalty, leverage is that of the unpenalised least "
                      "squares design."
                    : "A flag asks for a second look at the row (a typing "
                      "error, an unusual case), not for its removal.",
                    WFMT_NONE);
    }
}

/* The Diagnostics sheet: one row per fitted row with its leverage,
 * studentized residual, Cook's distance (logistic: also the Pearson and
 * deviance residuals) and the flags it raises; the thresholds and counts
 * beside. */
static rf_status write_diagnostics(writer *w, const job *j, const table *data,
                                   const table *score, const design *d,
                                   const fit_result *rm, rf_error *err)
{
    const diagnose_result *g = rm->diag;
    writer_sheet *s = writer_add_sheet(w, "Diagnostics", err);
    if (s == NULL)
        return err->status;
    int lg = rm->logistic != NULL, has_id = j->id.name != NULL;
    const char *names[10];
    uint16_t nc = 0;
    names[nc++] = "source";
    names[nc++] = "row";
    if (has_id)
        names[nc++] = j->id.name;
    uint16_t c_lev = nc;
    names[nc++] = "leverage";
    names[nc++] = "studentized residual";
    names[nc++] = "cooks distance";
    if (lg) {
        names[nc++] = "pearson residual";
        names[nc++] = "deviance residual";
    }
    uint16_t c_flag = nc;
    names[nc++] = "flag";
    writer_column(s, 0, 8, WFMT_NONE);
    writer_column(s, 1, 8, WFMT_INTEGER);
    if (has_id)
        writer_column(s, 2, 12, WFMT_NONE);
    for (uint16_t c = c_lev; c < c_flag; c++)
        writer_column(s, c, 14, WFMT_FIXED4);
    writer_column(s, c_flag, 36, WFMT_NONE);
    writer_column(s, (uint16_t)(c_flag + 2), 26, WFMT_NONE);
    writer_column(s, (uint16_t)(c_flag + 3), 14, WFMT_SIG);
    writer_column(s, (uint16_t)(c_flag + 4), 10, WFMT_INTEGER);
    writer_column(s, (uint16_t)(c_flag + 5), 60, WFMT_NONE);
    writer_header(s, names, nc, (uint32_t)d->n_fit);

    /* the thresholds, beside the rows (common practice; see
     * docs/methods.md), written row by row with the rows they sit beside:
     * the sheet is streamed in row order */
    uint16_t ct = (uint16_t)(c_flag + 2);
    writer_text(s, 0, ct, "check", WFMT_BOLD);
    writer_text(s, 0, (uint16_t)(ct + 1), "threshold", WFMT_BOLD);
    writer_text(s, 0, (uint16_t)(ct + 2), "rows flagged", WFMT_BOLD);
    writer_text(s, 0, (uint16_t)(ct + 3), "rule", WFMT_BOLD);
    uint32_t r = 1;
    char text[80];
    for (size_t o = 0; o < d->n_rows; o++) {
        const design_row *row = &d->rows[o];
        if (row->status != ROW_FITTED)
            continue;
        const table *t = row->source == SOURCE_DATA ? data : score;
        size_t i = row->index;
        writer_text(s, r, 0, "data", WFMT_NONE);
        writer_number(s, r, 1, table_row_source(t, row->row), WFMT_INTEGER,
                      NULL);
        if (has_id && d->id_col_data >= 0)
            write_cell(s, r, 2, t, row->row, (size_t)d->id_col_data);
        uint16_t c = c_lev;
        writer_number(s, r, c++, g->leverage[i], WFMT_FIXED4, NULL);
        writer_number(s, r, c++, g->student[i], WFMT_FIXED4, NULL);
        writer_number(s, r, c++, g->cooks[i], WFMT_FIXED4, NULL);
        if (lg) {
            writer_number(s, r, c++, g->pearson[i], WFMT_FIXED4, NULL);
            writer_number(s, r, c++, g->deviance[i], WFMT_FIXED4, NULL);
        }
        diagnose_flag_text(g->flag[i], text, sizeof text);
        if (text[0])
            writer_text(s, r, c_flag, text, WFMT_NONE);
        if (r <= THRESH_LINES)
            thresh_line(s, r, ct, g, lg, rm->ridge > 0 && !lg);
        r++;
    }
    for (; r <= THRESH_LINES; r++)
        thresh_line(s, r, ct, g, lg, rm->ridge > 0 && !lg);
    (void)score;
    return writer_status(w, err);
}

static rf_status write_job(writer *w, const job *j,
                           const report_facts *facts,
                           const rf_warnings *warn, const char *caution,
                           rf_error *err)
{
    writer_sheet *s = writer_add_sheet(w, "Job", err);
    if (s == NULL)
        return err->status;
    writer_column(s, 0, 24, WFMT_NONE);
    writer_column(s, 1, 70, WFMT_NONE);
    writer_column(s, 2, 20, WFMT_NONE);
    writer_column(s, 3, 68, WFMT_NONE);
    uint32_t r = 0;
    writer_text(s, r++, 0, "job file", WFMT_BOLD);
    /* the job's text, a line a row */
    const char *p = j->text;
    char line[4096];
    while (p && *p) {
        const char *e = strchr(p, '\n');
        size_t len = e ? (size_t)(e - p) : strlen(p);
        if (len && p[len - 1] == '\r')
            len--;
        if (len >= sizeof line)
            len = sizeof line - 1;
        memcpy(line, p, len);
        line[len] = '\0';
        writer_text(s, r, 0, line, WFMT_NONE);
        r++;
        p = e ? e + 1 : NULL;
    }
    r++;
    writer_text(s, r++, 0, "run", WFMT_BOLD);
    writer_text(s, r, 0, "rowfit version", WFMT_NONE);
    writer_text(s, r++, 1, facts->version, WFMT_NONE);
    writer_text(s, r, 0, "run at", WFMT_NONE);
    writer_text(s, r++, 1, facts->started, WFMT_NONE);
    writer_text(s, r, 0, "job file", WFMT_NONE);
    writer_text(s, r++, 1, j->file, WFMT_NONE);
    r++;
    writer_text(s, r, 0, "input", WFMT_BOLD);
    writer_text(s, r, 1, "file", WFMT_BOLD);
    writer_text(s, r, 2, "bytes", WFMT_BOLD);
    writer_text(s, r++, 3, "sha-256", WFMT_BOLD);
    static const char *const role[3] = { "job", "data", "score" };
    for (int k = 0; k < 3; k++) {
        if (facts->files[k] == NULL)
            continue;
        writer_text(s, r, 0, role[k], WFMT_NONE);
        writer_text(s, r, 1, facts->files[k], WFMT_NONE);
        writer_number(s, r, 2, (double)facts->info[k].size, WFMT_INTEGER,
                      NULL);
        writer_text(s, r++, 3, facts->info[k].sha256, WFMT_NONE);
    }
    r++;
    writer_text(s, r++, 0, "warnings", WFMT_BOLD);
    if (warn->n == 0)
        writer_text(s, r++, 0, "none", WFMT_NONE);
    for (size_t i = 0; i < warn->n; i++)
        writer_text(s, r++, 0, warn->items[i], WFMT_NONE);
    if (warn->dropped) {
        char more[80];
        snprintf(more, sizeof more, "and %zu more", warn->dropped);
        writer_text(s, r++, 0, more, WFMT_NONE);
    }
    r++;
    writer_text(s, r++, 0, "caution", WFMT_BOLD);
    writer_text(s, r++, 0, caution, WFMT_NONE);
    return writer_status(w, err);
}

rf_status report_write(writer *w, const job *j, const table *data,
                       const table *score, const design *d,
                       const fit_result *rm, const report_facts *facts,
                       rf_warnings *warn, rf_error *err)
{
    rf_status st;
    assert((rm->linear != NULL) + (rm->logistic != NULL)
           + (rm->network != NULL) == 1);
    if ((st = write_estimates(w, j, data, score, d, rm, warn, err)))
        return st;
    if (rm->network) {
        if ((st = write_weights(w, d, rm, err))
            || (st = write_summary_network(w, j, data, score, d, rm, err)))
            return st;
    } else {
        if ((st = write_coefficients(w, d, rm, err))
            || (st = write_summary(w, j, data, score, d, rm, err)))
            return st;
    }
    if (rm->cv && (st = write_validation(w, d, rm, err)))
        return st;
    if (rm->diag
        && (st = write_diagnostics(w, j, data, score, d, rm, err)))
        return st;
    return write_job(w, j, facts, warn,
                     rm->classify ? CAUTION_PEOPLE : CAUTION_PRICE, err);
}
