/*
 * design.c: job + tables -> design matrix (see design.h).
 *
 * Three passes over the rows. The first evaluates every needed value of
 * every row (derived columns in job order, memoised per row) and decides
 * whether the row can be fitted, estimated or must be skipped, and why. The
 * second learns the category levels from the fitted rows only (reference =
 * the most frequent level, ties to the one that sorts first), so nothing
 * about rows without a known target leaks into the terms. The third fills
 * X for fitted rows and Xe for rows to estimate.
 */
#include "design.h"

#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "formula.h"

#define REASON_MAX 512

/* Distinct level strings of one category, interned by hash. */
typedef struct intern {
    char **s;
    size_t n, cap;
    size_t *slot;       /* open addressing: index + 1, 0 = empty */
    size_t nslot;
    size_t *count;      /* occurrences in fitted rows */
} intern;

static uint64_t hash_str(const char *s)
{
    uint64_t h = 1469598103934665603ULL;  /* FNV-1a */
    for (; *s; s++)
        h = (h ^ (unsigned char)*s) * 1099511628211ULL;
    return h;
}

static void intern_free(intern *in)
{
    for (size_t i = 0; i < in->n; i++)
        free(in->s[i]);
    free(in->s);
    free(in->slot);
    free(in->count);
    memset(in, 0, sizeof *in);
}

static int intern_grow(intern *in)
{
    size_t nslot = in->nslot ? 2 * in->nslot : 64;
    size_t *slot = calloc(nslot, sizeof *slot);
    if (slot == NULL)
        return -1;
    for (size_t i = 0; i < in->n; i++) {
        size_t h = hash_str(in->s[i]) & (nslot - 1);
        while (slot[h])
            h = (h + 1) & (nslot - 1);
        slot[h] = i + 1;
    }
    free(in->slot);
    in->slot = slot;
    in->nslot = nslot;
    return 0;
}

/* The interned copy of s, or NULL on no memory. */
static const char *intern_add(intern *in, const char *s)
{
    if (2 * (in->n + 1) > in->nslot && intern_grow(in))
        return NULL;
    size_t h = hash_str(s) & (in->nslot - 1);
    while (in->slot[h]) {
        const char *t = in->s[in->slot[h] - 1];
        if (strcmp(t, s) == 0)
            return t;
        h = (h + 1) & (in->nslot - 1);
    }
    if (in->n == in->cap) {
        size_t cap = in->cap ? 2 * in->cap : 16;
        char **ns = realloc(in->s, cap * sizeof *ns);
        if (ns == NULL)
            return NULL;
        in->s = ns;
        in->cap = cap;
    }
    char *copy = strdup(s);
    if (copy == NULL)
        return NULL;
    in->s[in->n++] = copy;
    in->slot[h] = in->n;
    return copy;
}

static long intern_find(const intern *in, const char *s)
{
    if (in->nslot == 0)
        return -1;
    size_t h = hash_str(s) & (in->nslot - 1);
    while (in->slot[h]) {
        if (strcmp(in->s[in->slot[h] - 1], s) == 0)
            return (long)in->slot[h] - 1;
        h = (h + 1) & (in->nslot - 1);
    }
    return -1;
}

/* Where a name's value comes from in one table: a column, or a derive. */
typedef struct source {
    long col;      /* column of the table, or -1 */
    long derive;   /* index of the derive, or -1 */
} source;

/* Everything needed while reading the rows of one table. */
typedef struct ctx {
    const job *j;
    const table *t;
    formula **f;           /* n_derives parsed formulas */
    source **refs;         /* per derive, the source of each reference */
    /* per-row memo of derived values */
    fvalue *dval;
    int *dstate;           /* 0 not yet, 1 ok, 2 failed */
    char (*dwhy)[REASON_MAX];
    long *dblank;          /* per derive: a blank cell it uses (col), or -1 */
    char textbuf[64];
} ctx;

static rf_status nomem(rf_error *err)
{
    return error_nomem(err, NULL);
}

static void job_where(const job *j, int line, char *buf, size_t n)
{
    snprintf(buf, n, "%s:%d", j->file, line);
}

/* Resolves name in table t, or among derives before `before`. */
static source resolve(const job *j, const table *t, const char *name,
                      size_t before)
{
    source s = { -1, -1 };
    for (size_t k = before; k-- > 0;)
        if (strcmp(j->derives[k].name, name) == 0) {
            s.derive = (long)k;
            return s;
        }
    if (t)
        s.col = table_find_column(t, name);
    return s;
}

/* "unknown column 'bathroms' (did you mean 'bathrooms'?)" */
static rf_status unknown_name(const job *j, const table *t, const char *name,
                              int line, size_t before, const char *role,
                              rf_error *err)
{
    size_t nc = table_cols(t), n = nc + before;
    const char **cand = malloc((n ? n : 1) * sizeof *cand);
    if (cand == NULL)
        return nomem(err);
    for (size_t c = 0; c < nc; c++)
        cand[c] = table_column_name(t, c);
    for (size_t k = 0; k < before; k++)
        cand[nc + k] = j->derives[k].name;
    const char *near = job_nearest(name, cand, n);
    char where[ERROR_WHERE_MAX];
    job_where(j, line, where, sizeof where);
    const char *sheet = table_sheet(t);
    char file[600];
    if (sheet)
        snprintf(file, sizeof file, "%s[%s]", table_file(t), sheet);
    else
        snprintf(file, sizeof file, "%s", table_file(t));
    if (near)
        error_set(err, RF_EINPUT, where,
                  "unknown %s '%s': %s has no such column (did you mean '%s'?)",
                  role, name, file, near);
    else
        error_set(err, RF_EINPUT, where,
                  "unknown %s '%s': %s has no such column or derive",
                  role, name, file);
    free(cand);
    return RF_EINPUT;
}

/* The value of cell (r, c) as a formula value. */
static fvalue cell_value(const table *t, size_t r, size_t c)
{
    fvalue v = { FV_BLANK, 0, NULL };
    switch (table_cell_type(t, r, c)) {
    case CELL_BLANK:
        break;
    case CELL_NUMBER:
    case CELL_DATE:
    case CELL_BOOL:
        v.type = FV_NUMBER;
        v.num = table_cell_number(t, r, c);
        break;
    case CELL_TEXT:
        v.type = FV_TEXT;
        v.text = table_cell_text(t, r, c);
        break;
    case CELL_ERROR:
        v.type = FV_ERROR;
        v.text = table_cell_text(t, r, c);
        break;
    }
    return v;
}

/* Evaluates derive k for row r of the context's table. Returns 0 with *out,
 * or -1 with the reason in c->dwhy[k]. */
static int derive_value(ctx *c, size_t r, size_t k, fvalue *out);

/* The value of a source for row r; -1 (reason in why) only for a derive
 * that cannot be computed. */
static int source_value(ctx *c, size_t r, source s, fvalue *out,
                        const char **why)
{
    if (s.col >= 0) {
        *out = cell_value(c->t, r, (size_t)s.col);
        return 0;
    }
    if (derive_value(c, r, (size_t)s.derive, out)) {
        *why = c->dwhy[s.derive];
        return -1;
    }
    return 0;
}

/* A reason that names a cell ("year_built is 'n/a', not a number") is
 * clear as it is; one that does not ("division by zero") gets the derive's
 * name in front, so the row's status says which computation failed. */
static void name_the_derive(const formula *f, const char *name, char *why)
{
    for (size_t i = 0; i < formula_nrefs(f); i++) {
        size_t len = strlen(formula_ref(f, i));
        if (strncmp(why, formula_ref(f, i), len) == 0
            && strncmp(why + len, " is ", 4) == 0)
            return;
    }
    char tmp[REASON_MAX];
    snprintf(tmp, sizeof tmp, "%s: %s", name, why);
    memcpy(why, tmp, REASON_MAX);
}

static int derive_value(ctx *c, size_t r, size_t k, fvalue *out)
{
    if (c->dstate[k] == 1) {
        *out = c->dval[k];
        return 0;
    }
    if (c->dstate[k] == 2)
        return -1;
    const formula *f = c->f[k];
    size_t nr = formula_nrefs(f);
    fvalue vals[64], *v = nr <= 64 ? vals : malloc(nr * sizeof *v);
    if (v == NULL) {
        snprintf(c->dwhy[k], REASON_MAX, "out of memory");
        c->dstate[k] = 2;
        return -1;
    }
    int rc = 0;
    c->dblank[k] = -1;
    for (size_t i = 0; i < nr && rc == 0; i++) {
        const char *why = NULL;
        source s = c->refs[k][i];
        if (source_value(c, r, s, &v[i], &why)) {
            size_t len = strnlen(why, REASON_MAX - 1);
            memmove(c->dwhy[k], why, len);  /* why is an earlier derive's */
            c->dwhy[k][len] = '\0';
            if (c->dblank[s.derive] >= 0)
                c->dblank[k] = c->dblank[s.derive];
            rc = -1;
        } else if (s.col >= 0 && v[i].type == FV_BLANK) {
            c->dblank[k] = s.col;
        }
    }
    if (rc == 0) {
        if (formula_eval(f, v, out, c->dwhy[k], REASON_MAX) == 0) {
            c->dval[k] = *out;
        } else {
            rc = -1;
            name_the_derive(f, c->j->derives[k].name, c->dwhy[k]);
        }
    }
    if (v != vals)
        free(v);
    if (rc == 0 && out->type == FV_NUMBER && !isfinite((double)out->num)) {
        snprintf(c->dwhy[k], REASON_MAX, "%s is not a finite number",
                 c->j->derives[k].name);
        rc = -1;
    }
    c->dstate[k] = rc == 0 ? 1 : 2;
    return rc;
}

/* Why a value cannot serve as a number, or NULL when it can. */
static const char *not_number(const char *name, const fvalue *v, char *buf,
                              size_t n)
{
    switch (v->type) {
    case FV_NUMBER:
        return NULL;
    case FV_BLANK:
        snprintf(buf, n, "%s is blank", name);
        return buf;
    case FV_TEXT:
        snprintf(buf, n, "%s is '%.200s', not a number", name, v->text);
        return buf;
    case FV_ERROR:
        snprintf(buf, n, "%s is %s", name, v->text ? v->text : "an error");
        return buf;
    }
    return buf;
}

/* The level text of a category value, or NULL with a reason. Numbers are
 * shown as a spreadsheet shows them (%.15g). */
static const char *level_text(const char *name, const fvalue *v, char *buf,
                              size_t n, char *why, size_t wn)
{
    switch (v->type) {
    case FV_TEXT:
        if (v->text[0] == '\0')
            break;
        return v->text;
    case FV_NUMBER:
        snprintf(buf, n, "%.15Lg", v->num);
        return buf;
    case FV_ERROR:
        snprintf(why, wn, "%s is %s", name, v->text ? v->text : "an error");
        return NULL;
    case FV_BLANK:
        break;
    }
    snprintf(why, wn, "%s is blank", name);
    return NULL;
}

static void ctx_free(ctx *c, size_t nd)
{
    if (c->refs)
        for (size_t k = 0; k < nd; k++)
            free(c->refs[k]);
    free(c->refs);
    free(c->dval);
    free(c->dstate);
    free(c->dwhy);
    free(c->dblank);
}

/* Resolves every derive's references in table t. */
static rf_status ctx_init(ctx *c, const job *j, const table *t, formula **f,
                          const unsigned char *needed, rf_error *err)
{
    size_t nd = j->n_derives;
    memset(c, 0, sizeof *c);
    c->j = j;
    c->t = t;
    c->f = f;
    c->refs = calloc(nd ? nd : 1, sizeof *c->refs);
    c->dval = calloc(nd ? nd : 1, sizeof *c->dval);
    c->dstate = calloc(nd ? nd : 1, sizeof *c->dstate);
    c->dwhy = calloc(nd ? nd : 1, sizeof *c->dwhy);
    c->dblank = calloc(nd ? nd : 1, sizeof *c->dblank);
    if (!c->refs || !c->dval || !c->dstate || !c->dwhy || !c->dblank)
        return nomem(err);
    for (size_t k = 0; k < nd; k++) {
        size_t nr = formula_nrefs(f[k]);
        c->refs[k] = calloc(nr ? nr : 1, sizeof **c->refs);
        if (c->refs[k] == NULL)
            return nomem(err);
        for (size_t i = 0; i < nr && needed[k]; i++) {
            const char *name = formula_ref(f[k], i);
            source s = resolve(j, t, name, k);
            if (s.col < 0 && s.derive < 0) {
                /* a later derive of that name is an ordering mistake */
                for (size_t l = k; l < nd; l++)
                    if (strcmp(j->derives[l].name, name) == 0) {
                        char where[ERROR_WHERE_MAX];
                        job_where(j, j->derives[k].line, where, sizeof where);
                        return error_set(err, RF_EINPUT, where,
                                         "derive '%s' uses '%s', which is "
                                         "derived later, on line %d; move "
                                         "it above",
                                         j->derives[k].name, name,
                                         j->derives[l].line);
                    }
                return unknown_name(j, t, name, j->derives[k].line, k,
                                    "column", err);
            }
            c->refs[k][i] = s;
        }
    }
    return RF_OK;
}

static void ctx_row(ctx *c)
{
    memset(c->dstate, 0, (c->j->n_derives ? c->j->n_derives : 1)
                             * sizeof *c->dstate);
}

void design_free(design *d)
{
    if (d == NULL)
        return;
    if (d->term)
        for (size_t k = 0; k < d->p; k++)
            free(d->term[k]);
    free(d->term);
    free(d->X);
    free(d->y);
    free(d->Xe);
    if (d->rows)
        for (size_t i = 0; i < d->n_rows; i++)
            free(d->rows[i].reason);
    free(d->rows);
    free(d->target);
    if (d->inputs)
        for (size_t k = 0; k < d->n_inputs; k++) {
            free(d->inputs[k].name);
            free(d->inputs[k].value);
            free(d->inputs[k].level);
            free(d->inputs[k].levels);  /* strings belong to the interns */
        }
    if (d->store) {
        intern *lev = d->store;
        for (size_t k = 0; k < d->n_inputs; k++)
            intern_free(&lev[k]);
        free(lev);
    }
    if (d->class_store) {
        intern_free(d->class_store);
        free(d->class_store);
    }
    free(d->label);
    free(d->inputs);
    for (size_t k = 0; d->formulas && k < d->n_formulas; k++)
        formula_free(d->formulas[k]);
    free(d->formulas);
    free(d);
}

const long double *design_row_x(const design *d, size_t out_row)
{
    const design_row *r = &d->rows[out_row];
    if (r->status == ROW_FITTED)
        return d->X + r->index * d->p;
    if (r->status == ROW_ESTIMATED)
        return d->Xe + r->index * d->p;
    return NULL;
}

size_t design_input_terms(const design_input *in)
{
    if (!in->is_category)
        return 1;
    if (in->reference == DESIGN_NO_REFERENCE)
        return in->n_levels;
    return in->n_levels ? in->n_levels - 1 : 0;
}

const char *design_term_level(const design_input *in, size_t k)
{
    size_t lv = k - in->first_term;
    if (lv >= in->reference)   /* never true without a reference */
        lv++;
    return in->levels[lv];
}

static int cmp_str(const void *a, const void *b)
{
    return strcmp(*(const char *const *)a, *(const char *const *)b);
}

/* The job's inputs and categories, merged in job-line order. */
static rf_status collect_inputs(const job *j, design *d, rf_error *err)
{
    size_t n = j->n_inputs + j->n_categories;
    d->inputs = calloc(n ? n : 1, sizeof *d->inputs);
    if (d->inputs == NULL)
        return nomem(err);
    size_t a = 0, b = 0;
    while (a < j->n_inputs || b < j->n_categories) {
        int take_cat = a >= j->n_inputs
                       || (b < j->n_categories
                           && j->categories[b].line < j->inputs[a].line);
        const job_name *jn = take_cat ? &j->categories[b++] : &j->inputs[a++];
        design_input *in = &d->inputs[d->n_inputs++];
        in->name = strdup(jn->name);
        if (in->name == NULL)
            return nomem(err);
        in->is_category = take_cat;
        in->line = jn->line;
    }
    return RF_OK;
}

/* The row's reason, copied; NULL on no memory. */
static char *keep_reason(const char *why)
{
    return strdup(why);
}

/* The class label of a target value for model logistic: a number as a
 * spreadsheet shows it, a yes-no cell as TRUE/FALSE, text trimmed; the
 * words yes, no, true and false in any case are one label each. */
static rf_status class_label(design *d, intern *tlab, size_t o,
                             const table *t, size_t r, long col,
                             const fvalue *v, rf_error *err)
{
    char buf[64];
    const char *text = buf;
    size_t len;
    if (v->type == FV_NUMBER) {
        if (t && col >= 0 && table_cell_type(t, r, (size_t)col) == CELL_BOOL)
            snprintf(buf, sizeof buf, "%s", v->num != 0 ? "TRUE" : "FALSE");
        else
            snprintf(buf, sizeof buf, "%.15Lg", v->num);
    } else {
        len = strlen(v->text);
        const char *s = table_trim_span(v->text, &len);
        /* true and false as a spreadsheet shows its yes-no cells */
        static const char *const words[] = { "yes", "no", "true", "false" };
        static const char *const shown[] = { "yes", "no", "TRUE", "FALSE" };
        text = NULL;
        for (size_t k = 0; k < 4 && !text; k++)
            if (table_word_is(s, len, words[k]))
                text = shown[k];
        if (text == NULL) {
            char *copy = strndup(s, len);
            if (copy == NULL)
                return nomem(err);
            const char *in = intern_add(tlab, copy);
            free(copy);
            if (in == NULL)
                return nomem(err);
            d->label[o] = in;
            return RF_OK;
        }
    }
    if ((d->label[o] = intern_add(tlab, text)) == NULL)
        return nomem(err);
    return RF_OK;
}

static int same_word(const char *a, const char *b)
{
    for (; *a && *b; a++, b++) {
        int x = (*a >= 'A' && *a <= 'Z') ? *a - 'A' + 'a' : *a;
        int y = (*b >= 'A' && *b <= 'Z') ? *b - 'A' + 'a' : *b;
        if (x != y)
            return 0;
    }
    return *a == *b;
}

/* model logistic: the fitted rows' target must have exactly two classes;
 * the positive one is `positive`, or 1 / yes / true. Sets target[] to 1 or
 * 0 in fitted rows. Errors list the values found (at most ten, counted). */
static rf_status code_classes(design *d, const job *j, intern *tlab,
                              rf_error *err)
{
    size_t nl = tlab->n;
    size_t *count = calloc(nl ? nl : 1, sizeof *count);
    if (count == NULL)
        return nomem(err);
    for (size_t o = 0; o < d->n_rows; o++)
        if (d->rows[o].status == ROW_FITTED)
            count[intern_find(tlab, d->label[o])]++;
    size_t used = 0, a = 0, b = 0;
    for (size_t l = 0; l < nl; l++)
        if (count[l]) {
            if (used == 0)
                a = l;
            else if (used == 1)
                b = l;
            used++;
        }
    char where[ERROR_WHERE_MAX], list[ERROR_MESSAGE_MAX / 2];
    size_t pos = 0;
    list[0] = '\0';
    /* the most frequent values first (ties in order of appearance): ten
     * passes over the values, each taking the largest count below the
     * last one shown */
    size_t last_count = (size_t)-1, last_l = 0;
    for (size_t shown = 0; shown < 10 && shown < used && pos < sizeof list;
         shown++) {
        size_t best = nl;
        for (size_t l = 0; l < nl; l++) {
            int after = count[l] < last_count
                        || (count[l] == last_count && l > last_l);
            if (count[l] && after && (best == nl || count[l] > count[best]))
                best = l;
        }
        if (best == nl)
            break;
        pos += (size_t)snprintf(list + pos, sizeof list - pos,
                                "%s'%.60s' (%zu)", shown ? ", " : "",
                                tlab->s[best], count[best]);
        last_count = count[best];
        last_l = best;
    }
    if (used > 10 && pos < sizeof list)
        snprintf(list + pos, sizeof list - pos, " and %zu more", used - 10);
    snprintf(where, sizeof where, "%s:%d", j->file, j->target.line);
    rf_status st = RF_OK;
    if (used != 2) {
        st = error_set(err, RF_EINPUT, where,
                       used < 2 ? "a yes/no target needs two values among "
                                  "the fitted rows; '%s' has %s%s"
                                : "a yes/no target must have exactly two "
                                  "values among the fitted rows; '%s' has "
                                  "%s%s",
                       j->target.name, used == 0 ? "none" : "",
                       used == 0 ? "" : list);
        goto out;
    }
    const char *la = tlab->s[a], *lb = tlab->s[b];
    long positive = -1;
    if (j->positive) {
        /* the exact spelling first: 'Done' and 'done' can be two labels */
        if (strcmp(j->positive, la) == 0)
            positive = (long)a;
        else if (strcmp(j->positive, lb) == 0)
            positive = (long)b;
        else if (same_word(j->positive, la))
            positive = (long)a;
        else if (same_word(j->positive, lb))
            positive = (long)b;
        else {
            snprintf(where, sizeof where, "%s:%d", j->file, j->positive_line);
            st = error_set(err, RF_EINPUT, where,
                           "positive '%s' is not a value of '%s', whose "
                           "values are %s", j->positive, j->target.name, list);
            goto out;
        }
    } else {
        static const char *const yes[] = { "1", "yes", "TRUE" };
        static const char *const no[] = { "0", "no", "FALSE" };
        for (size_t k = 0; k < 3 && positive < 0; k++) {
            if (strcmp(la, yes[k]) == 0 && strcmp(lb, no[k]) == 0)
                positive = (long)a;
            else if (strcmp(lb, yes[k]) == 0 && strcmp(la, no[k]) == 0)
                positive = (long)b;
        }
        if (positive < 0) {
            st = error_set(err, RF_EINPUT, where,
                           "the target '%s' has the values %s; say which is "
                           "the event with `positive VALUE`",
                           j->target.name, list);
            goto out;
        }
    }
    size_t neg = (size_t)positive == a ? b : a;
    d->positive = tlab->s[positive];
    d->negative = tlab->s[neg];
    d->n_positive = count[positive];
    d->n_negative = count[neg];
    for (size_t o = 0; o < d->n_rows; o++)
        if (d->rows[o].status == ROW_FITTED)
            d->target[o] = d->label[o] == d->positive ? 1 : 0;
out:
    free(count);
    return st;
}

rf_status design_build(const job *j, const table *data, const table *score,
                       design **out, rf_warnings *warn, rf_error *err)
{
    *out = NULL;
    rf_status st = RF_OK;
    size_t nd = j->n_derives;
    formula **f = calloc(nd ? nd : 1, sizeof *f);
    ctx cx[2];
    memset(cx, 0, sizeof cx);
    intern *lev = NULL;
    source *src[2] = { NULL, NULL };
    source tsrc = { -1, -1 };
    unsigned char *needed = NULL;
    intern *tlab = calloc(1, sizeof *tlab);
    design *d = calloc(1, sizeof *d);
    if (f == NULL || d == NULL || tlab == NULL) {
        st = nomem(err);
        goto done;
    }
    d->intercept = j->intercept;
    d->binary = j->model == MODEL_LOGISTIC;
    d->id_col_data = d->id_col_score = -1;

    /* derives: parse, and names that clash */
    char where[ERROR_WHERE_MAX];
    for (size_t k = 0; k < nd; k++) {
        job_where(j, j->derives[k].line, where, sizeof where);
        if ((st = formula_parse(j->derives[k].formula, where, &f[k], err)))
            goto done;
        if (table_find_column(data, j->derives[k].name) >= 0) {
            st = error_set(err, RF_EINPUT, where,
                           "derive '%s' has the name of a column of %s; "
                           "choose another name", j->derives[k].name,
                           table_file(data));
            goto done;
        }
        for (size_t l = 0; l < k; l++)
            if (strcmp(j->derives[l].name, j->derives[k].name) == 0) {
                st = error_set(err, RF_EINPUT, where,
                               "'%s' is already derived on line %d",
                               j->derives[k].name, j->derives[l].line);
                goto done;
            }
    }
    /* Every derive must make sense in data; in score only those the
     * inputs use, directly or through other derives (a score table has no
     * target, so a derive of the target cannot be computed there).
     * Derives use only earlier ones, so one backward pass finds them. */
    needed = calloc(2 * (nd ? nd : 1), 1);
    if (needed == NULL) {
        st = nomem(err);
        goto done;
    }
    memset(needed, 1, nd);
    unsigned char *need_score = needed + (nd ? nd : 1);
    for (size_t k = 0; k < nd; k++)
        for (size_t i = 0; i < j->n_inputs + j->n_categories; i++) {
            const char *in = i < j->n_inputs
                                 ? j->inputs[i].name
                                 : j->categories[i - j->n_inputs].name;
            if (strcmp(in, j->derives[k].name) == 0)
                need_score[k] = 1;
        }
    for (size_t k = nd; k-- > 0;)
        for (size_t i = 0; need_score[k] && i < formula_nrefs(f[k]); i++) {
            source s = resolve(j, NULL, formula_ref(f[k], i), k);
            if (s.derive >= 0)
                need_score[s.derive] = 1;
        }
    const table *tabs[2] = { data, score };
    size_t ntab = score ? 2 : 1;
    for (size_t s = 0; s < ntab; s++)
        if ((st = ctx_init(&cx[s], j, tabs[s], f, s ? need_score : needed,
                           err)))
            goto done;

    /* inputs, target, id */
    if ((st = collect_inputs(j, d, err)))
        goto done;
    size_t ni = d->n_inputs;
    for (size_t s = 0; s < ntab; s++) {
        src[s] = calloc(ni ? ni : 1, sizeof *src[s]);
        if (src[s] == NULL) {
            st = nomem(err);
            goto done;
        }
        for (size_t k = 0; k < ni; k++) {
            src[s][k] = resolve(j, tabs[s], d->inputs[k].name, nd);
            if (src[s][k].col < 0 && src[s][k].derive < 0) {
                st = unknown_name(j, tabs[s], d->inputs[k].name,
                                  d->inputs[k].line, nd,
                                  d->inputs[k].is_category ? "category"
                                                           : "input", err);
                goto done;
            }
        }
    }
    tsrc = resolve(j, data, j->target.name, nd);
    if (tsrc.col < 0 && tsrc.derive < 0) {
        st = unknown_name(j, data, j->target.name, j->target.line, nd,
                          "target", err);
        goto done;
    }
    for (size_t k = 0; k < ni; k++)
        if (strcmp(d->inputs[k].name, j->target.name) == 0) {
            job_where(j, d->inputs[k].line, where, sizeof where);
            st = error_set(err, RF_EINPUT, where,
                           "'%s' is the target; it cannot also be an input",
                           j->target.name);
            goto done;
        }
    d->target_col = tsrc.col;
    /* model network: a classifier for yes/no targets, a regression for
     * numbers. It classifies when the job names `positive`, or when most
     * of the target column's filled cells are text or yes-no cells (a
     * column of numbers, 0/1 included, is a numeric target unless
     * `positive` says otherwise; a stray 'n/a' in prices does not make
     * them labels) */
    if (j->model == MODEL_NETWORK) {
        size_t words = 0, filled = 0;
        for (size_t r = 0; tsrc.col >= 0 && r < table_rows(data); r++) {
            cell_type ct = table_cell_type(data, r, (size_t)tsrc.col);
            filled += ct != CELL_BLANK;
            words += ct == CELL_TEXT || ct == CELL_BOOL;
        }
        d->binary = j->positive != NULL || 2 * words > filled;
    }
    if (j->id.name) {
        d->id_col_data = table_find_column(data, j->id.name);
        if (d->id_col_data < 0) {
            st = unknown_name(j, data, j->id.name, j->id.line, 0, "id column",
                              err);
            goto done;
        }
        if (score) {
            d->id_col_score = table_find_column(score, j->id.name);
            if (d->id_col_score < 0
                && (st = error_warn(warn, table_file(score),
                                    "has no column '%s'; its rows get no id",
                                    j->id.name)))
                goto done;
        }
    }

    /* pass 1: every row's values and fate */
    size_t nrows = table_rows(data) + (score ? table_rows(score) : 0);
    d->n_rows = nrows;
    d->rows = calloc(nrows ? nrows : 1, sizeof *d->rows);
    d->target = malloc((nrows ? nrows : 1) * sizeof *d->target);
    d->label = calloc(nrows ? nrows : 1, sizeof *d->label);
    if (d->label == NULL) {
        st = nomem(err);
        goto done;
    }
    lev = calloc(ni ? ni : 1, sizeof *lev);
    if (d->rows == NULL || d->target == NULL || lev == NULL) {
        st = nomem(err);
        goto done;
    }
    for (size_t k = 0; k < ni; k++) {
        design_input *in = &d->inputs[k];
        if (in->is_category)
            in->level = calloc(nrows ? nrows : 1, sizeof *in->level);
        else
            in->value = malloc((nrows ? nrows : 1) * sizeof *in->value);
        if (in->is_category ? in->level == NULL : in->value == NULL) {
            st = nomem(err);
            goto done;
        }
    }
    size_t o = 0;
    char why[REASON_MAX], lbuf[64];
    for (size_t s = 0; s < ntab; s++) {
        const table *t = tabs[s];
        ctx *c = &cx[s];
        for (size_t r = 0; r < table_rows(t); r++, o++) {
            ctx_row(c);
            design_row *row = &d->rows[o];
            row->source = s == 0 ? SOURCE_DATA : SOURCE_SCORE;
            row->row = r;
            row->status = ROW_ESTIMATED;
            d->target[o] = NAN;
            for (size_t k = 0; k < ni; k++)
                if (!d->inputs[k].is_category)
                    d->inputs[k].value[o] = NAN;  /* until read */
            const char *bad = NULL;
            long bad_col = -1;
            /* the target (data rows only) */
            if (s == 0) {
                fvalue tv;
                const char *w = NULL;
                int blank_target = 0;
                if (tsrc.col >= 0) {
                    tv = cell_value(t, r, (size_t)tsrc.col);
                    if (tv.type == FV_BLANK)
                        blank_target = 1;
                    else if (d->binary && tv.type != FV_ERROR) {
                        if ((st = class_label(d, tlab, o, t, r, tsrc.col,
                                              &tv, err)))
                            goto done;
                    } else if ((bad = not_number(j->target.name, &tv, why,
                                                 sizeof why)))
                        bad_col = tsrc.col;
                } else if (source_value(c, r, tsrc, &tv, &w)) {
                    /* a derived target with a blank cell under it is
                     * unknown, so the row is estimated, not skipped */
                    if (c->dblank[tsrc.derive] >= 0)
                        blank_target = 1;
                    else {
                        snprintf(why, sizeof why, "%s", w);
                        bad = why;
                    }
                } else if (tv.type == FV_BLANK) {
                    blank_target = 1;
                } else if (d->binary && tv.type != FV_ERROR) {
                    if ((st = class_label(d, tlab, o, NULL, 0, -1, &tv, err)))
                        goto done;
                } else {
                    bad = not_number(j->target.name, &tv, why, sizeof why);
                }
                if (!bad && !blank_target) {
                    d->target[o] = tv.num;
                    row->status = ROW_FITTED;
                }
            }
            /* the inputs, in job order; all are read, so a skipped row
             * still shows what it has, and the first problem is its reason */
            for (size_t k = 0; k < ni; k++) {
                design_input *in = &d->inputs[k];
                fvalue v;
                const char *w = NULL, *kbad = NULL;
                char kwhy[REASON_MAX];
                if (source_value(c, r, src[s][k], &v, &w)) {
                    snprintf(kwhy, sizeof kwhy, "%s", w);
                    kbad = kwhy;
                } else if (in->is_category) {
                    const char *text = level_text(in->name, &v, lbuf,
                                                  sizeof lbuf, kwhy,
                                                  sizeof kwhy);
                    if (text == NULL)
                        kbad = kwhy;
                    else if ((in->level[o] = intern_add(&lev[k], text))
                             == NULL) {
                        st = nomem(err);
                        goto done;
                    }
                } else if ((kbad = not_number(in->name, &v, kwhy,
                                              sizeof kwhy)) == NULL) {
                    in->value[o] = v.num;
                }
                if (kbad && !bad) {
                    snprintf(why, sizeof why, "%s", kbad);
                    bad = why;
                    bad_col = w ? -1 : src[s][k].col;
                }
            }
            if (bad) {
                if (j->missing == MISSING_STOP) {
                    char cw[ERROR_WHERE_MAX];
                    table_where(t, r, bad_col >= 0 ? (size_t)bad_col
                                                   : (size_t)-1, cw, sizeof cw);
                    st = error_set(err, RF_EINPUT, cw,
                                   "%s (the job says `missing stop`; "
                                   "`missing skip` would skip this row)", bad);
                    goto done;
                }
                row->status = ROW_SKIPPED;
                if ((row->reason = keep_reason(bad)) == NULL) {
                    st = nomem(err);
                    goto done;
                }
            }
        }
    }

    if (d->binary && (st = code_classes(d, j, tlab, err)))
        goto done;

    /* pass 2: category levels from the fitted rows */
    for (size_t o2 = 0; o2 < nrows; o2++)
        if (d->rows[o2].status == ROW_FITTED)
            for (size_t k = 0; k < ni; k++)
                if (d->inputs[k].is_category) {
                    intern *in = &lev[k];
                    if (in->count == NULL
                        && (in->count = calloc(in->cap ? in->cap : 1,
                                               sizeof *in->count)) == NULL) {
                        st = nomem(err);
                        goto done;
                    }
                    in->count[intern_find(in, d->inputs[k].level[o2])]++;
                }
    size_t p = j->intercept ? 1 : 0;
    int first_category_seen = 0;
    for (size_t k = 0; k < ni; k++) {
        design_input *in = &d->inputs[k];
        in->first_term = p;
        if (!in->is_category) {
            p++;
            continue;
        }
        intern *L = &lev[k];
        size_t nl = 0;
        in->levels = malloc((L->n ? L->n : 1) * sizeof *in->levels);
        if (in->levels == NULL) {
            st = nomem(err);
            goto done;
        }
        for (size_t l = 0; l < L->n; l++)
            if (L->count && L->count[l] > 0)
                in->levels[nl++] = L->s[l];
        qsort(in->levels, nl, sizeof *in->levels, cmp_str);
        in->n_levels = nl;
        size_t best = 0, bestc = 0;
        for (size_t l = 0; l < nl; l++) {
            size_t cnt = L->count[intern_find(L, in->levels[l])];
            if (cnt > bestc) {
                bestc = cnt;
                best = l;
            }
        }
        /* Without an intercept the first category keeps every level, so
         * its levels carry the constant; later ones still need a
         * reference to stay identifiable (common practice). */
        in->reference = best;
        if (!j->intercept && !first_category_seen)
            in->reference = DESIGN_NO_REFERENCE;
        first_category_seen = 1;
        if (nl == 1 && in->reference != DESIGN_NO_REFERENCE
            && (st = error_warn(warn, NULL,
                                "category '%s' has a single level ('%s') in "
                                "the fitted rows, so it adds no term",
                                in->name, in->levels[0])))
            goto done;
        p += in->reference == DESIGN_NO_REFERENCE ? nl : nl > 0 ? nl - 1 : 0;
    }
    d->p = p;

    /* rows to estimate whose level was never fitted are skipped */
    for (size_t o2 = 0; o2 < nrows; o2++) {
        design_row *row = &d->rows[o2];
        if (row->status != ROW_ESTIMATED)
            continue;
        for (size_t k = 0; k < ni; k++) {
            design_input *in = &d->inputs[k];
            if (!in->is_category)
                continue;
            long li = intern_find(&lev[k], in->level[o2]);
            if (lev[k].count == NULL || lev[k].count[li] == 0) {
                snprintf(why, sizeof why,
                         "%s '%.200s' does not occur in the fitted rows",
                         in->name, in->level[o2]);
                row->status = ROW_SKIPPED;
                if ((row->reason = keep_reason(why)) == NULL) {
                    st = nomem(err);
                    goto done;
                }
                break;
            }
        }
    }

    /* terms */
    d->term = calloc(p ? p : 1, sizeof *d->term);
    if (d->term == NULL) {
        st = nomem(err);
        goto done;
    }
    size_t tk = 0;
    if (j->intercept && (d->term[tk++] = strdup("(intercept)")) == NULL) {
        st = nomem(err);
        goto done;
    }
    for (size_t k = 0; k < ni; k++) {
        design_input *in = &d->inputs[k];
        if (!in->is_category) {
            if ((d->term[tk++] = strdup(in->name)) == NULL) {
                st = nomem(err);
                goto done;
            }
            continue;
        }
        for (size_t l = 0; l < in->n_levels; l++) {
            if (l == in->reference)
                continue;
            size_t len = strlen(in->name) + strlen(in->levels[l]) + 3;
            if ((d->term[tk] = malloc(len)) == NULL) {
                st = nomem(err);
                goto done;
            }
            snprintf(d->term[tk++], len, "%s: %s", in->name, in->levels[l]);
        }
    }

    /* pass 3: X and Xe */
    size_t nfit = 0, nest = 0;
    for (size_t o2 = 0; o2 < nrows; o2++) {
        nfit += d->rows[o2].status == ROW_FITTED;
        nest += d->rows[o2].status == ROW_ESTIMATED;
        d->rows_skipped += d->rows[o2].status == ROW_SKIPPED;
    }
    if (nfit < p + 1) {
        const char *first = NULL;
        for (size_t o2 = 0; o2 < nrows && !first; o2++)
            first = d->rows[o2].reason;
        char tail[REASON_MAX + 64] = "";
        if (first)
            snprintf(tail, sizeof tail, "; %zu rows were skipped, the first "
                     "because %s", d->rows_skipped, first);
        job_where(j, j->target.line, where, sizeof where);
        st = error_set(err, RF_EINPUT, where,
                       "only %zu usable rows to fit %zu terms: there must be "
                       "more fitted rows than terms (fewer rows than terms "
                       "cannot be fitted)%s", nfit, p, tail);
        goto done;
    }
    if (p == 0) {
        job_where(j, j->model_line, where, sizeof where);
        st = error_set(err, RF_EINPUT, where,
                       "the model has no terms: no intercept, and no input "
                       "adds a term");
        goto done;
    }
    if (nfit > SIZE_MAX / sizeof(long double) / p) {
        st = nomem(err);
        goto done;
    }
    d->X = malloc(nfit * p * sizeof *d->X);
    d->y = malloc(nfit * sizeof *d->y);
    d->Xe = malloc((nest ? nest : 1) * p * sizeof *d->Xe);
    if (d->X == NULL || d->y == NULL || d->Xe == NULL) {
        st = nomem(err);
        goto done;
    }
    d->n_fit = nfit;
    d->n_est = nest;
    size_t fi = 0, ei = 0;
    for (size_t o2 = 0; o2 < nrows; o2++) {
        design_row *row = &d->rows[o2];
        long double *x;
        if (row->status == ROW_FITTED) {
            row->index = fi;
            d->y[fi] = d->target[o2];
            x = d->X + fi++ * p;
        } else if (row->status == ROW_ESTIMATED) {
            row->index = ei;
            x = d->Xe + ei++ * p;
        } else {
            continue;
        }
        size_t c = 0;
        if (j->intercept)
            x[c++] = 1;
        for (size_t k = 0; k < ni; k++) {
            design_input *in = &d->inputs[k];
            if (!in->is_category) {
                x[c++] = in->value[o2];
                continue;
            }
            for (size_t l = 0; l < in->n_levels; l++)
                if (l != in->reference)
                    x[c++] = strcmp(in->level[o2], in->levels[l]) == 0;
        }
    }

    for (size_t k = 0; k < ni; k++)
        d->inputs[k].derive = src[0][k].derive;
    d->formulas = f;      /* the report prints them as live formulas */
    d->n_formulas = nd;
    f = NULL;
    d->store = lev;
    lev = NULL;
    d->class_store = tlab;
    tlab = NULL;
    *out = d;
    d = NULL;
done:
    for (size_t s = 0; s < 2; s++) {
        ctx_free(&cx[s], nd);
        free(src[s]);
    }
    if (f)
        for (size_t k = 0; k < nd; k++)
            formula_free(f[k]);
    free(f);
    free(needed);
    if (tlab && d) {
        d->class_store = tlab;   /* design_free frees the labels */
        tlab = NULL;
    }
    free(tlab);
    if (lev && d) {
        d->store = lev;   /* design_free frees the interned levels */
        lev = NULL;
    }
    free(lev);
    design_free(d);
    return st;
}
