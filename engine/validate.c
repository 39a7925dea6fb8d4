/*
 * validate.c: fold assignment, out-of-fold measures, calibration table and
 * the choice of a ridge penalty (validate.h). Fits
 * nothing: the models refit themselves; classification measures and the
 * risk-group rule come from classify.c so that cross-validated and in-sample
 * numbers are computed the same way.
 */
#include "validate.h"

#include <assert.h>
#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <gsl/gsl_statistics_double.h>

/* n entries of size bytes each, or NULL when n * size would overflow. */
static void *alloc_array(size_t n, size_t size)
{
    if (n > SIZE_MAX / size)
        return NULL;
    return malloc((n ? n : 1) * size);
}

/* k folds of n rows: at least 2, and no more than the rows. */
static rf_status folds_check(size_t n, size_t k, rf_error *err)
{
    if (k < 2)
        return error_set(err, RF_EINPUT, NULL,
                         "cross-validation needs at least 2 folds, not %zu",
                         k);
    if (k > n)
        return error_set(err, RF_EINPUT, NULL,
                         "%zu folds need at least %zu rows; there %s %zu",
                         k, k, n == 1 ? "is" : "are", n);
    return RF_OK;
}

rf_status validate_folds(size_t n, size_t k, unsigned long seed,
                         const double *cls, size_t *fold, rf_error *err)
{
    if (folds_check(n, k, err))
        return err->status;
    assert(fold != NULL);
    if (cls != NULL)
        for (size_t i = 0; i < n; i++)
            if (!(cls[i] == 0 || cls[i] == 1))
                return error_set(err, RF_EINPUT, NULL,
                                 "class %zu of %zu is %g, not 0 or 1",
                                 i + 1, n, cls[i]);
    if (k == n) {
        /* leave-one-out: the folds are the rows, whatever the order */
        for (size_t i = 0; i < n; i++)
            fold[i] = i;
        return RF_OK;
    }

    size_t *order = alloc_array(n, sizeof *order);
    if (order == NULL)
        return error_nomem(err, NULL);
    gsl_rng *r = gsl_rng_alloc(gsl_rng_mt19937);
    if (r == NULL) {
        free(order);
        return error_nomem(err, NULL);
    }
    /* gsl_ran_shuffle draws gsl_rng_uniform_int(r, i + 1) for i < n,
     * which needs i + 1 <= gsl_rng_max + 1 = 2^32 for this generator. */
    if (n - 1 > gsl_rng_max(r)) {
        gsl_rng_free(r);
        free(order);
        return error_set(err, RF_EINPUT, NULL,
                         "%zu rows are too many to shuffle into folds", n);
    }
    gsl_rng_set(r, seed);

    /* Shuffle each class's rows and deal them on round-robin from the fold
     * where the previous class stopped: the whole deal is one run of the
     * folds 0, 1, ..., k - 1, 0, 1, ..., so fold sizes differ by at most
     * one, and so do the counts of a class, whose rows are a contiguous
     * stretch of that run. Without classes, all rows are one class. */
    size_t next = 0;
    int classes = cls != NULL ? 2 : 1;
    for (int c = 0; c < classes; c++) {
        size_t m = 0;
        for (size_t i = 0; i < n; i++)
            if (cls == NULL || cls[i] == c)
                order[m++] = i;
        if (m > 1)
            gsl_ran_shuffle(r, order, m, sizeof *order);
        for (size_t j = 0; j < m; j++) {
            fold[order[j]] = next;
            next = next + 1 == k ? 0 : next + 1;
        }
    }
    gsl_rng_free(r);
    free(order);
    return RF_OK;
}

/* rmse, mae and r squared of pred against y over m rows (validate.h), r
 * squared about these rows' own mean of y; sums in extended precision, the
 * mean by GSL's running mean (exact when the y are all equal, so such rows
 * give r squared NaN rather than a rounding residue). */
static void numeric_measures(const double *y, const double *pred, size_t m,
                             double out[VALIDATE_MEASURES])
{
    double ybar = gsl_stats_mean(y, 1, m);
    long double sse = 0, sae = 0, sst = 0;
    for (size_t i = 0; i < m; i++) {
        long double e = (long double)y[i] - pred[i];
        long double d = (long double)y[i] - ybar;
        sse += e * e;
        sae += fabsl(e);
        sst += d * d;
    }
    out[VALIDATE_RMSE] = (double)sqrtl(sse / m);
    out[VALIDATE_MAE] = (double)(sae / m);
    out[VALIDATE_R2] = sst > 0 ? (double)(1 - sse / sst) : NAN;
}

static rf_status check_inputs(const double *y, const double *pred, size_t n,
                              int classify, double threshold, rf_error *err)
{
    if (classify && !isfinite(threshold))
        return error_set(err, RF_EINPUT, NULL,
                         "threshold %g is not a number between 0 and 1",
                         threshold);
    for (size_t i = 0; i < n; i++) {
        if (classify ? !(y[i] == 0 || y[i] == 1) : !isfinite(y[i]))
            return error_set(err, RF_EINPUT, NULL, "outcome %zu of %zu is "
                             "%g, not %s", i + 1, n, y[i],
                             classify ? "0 or 1" : "a finite number");
        if (classify ? !(pred[i] >= 0 && pred[i] <= 1) : !isfinite(pred[i]))
            return error_set(err, RF_EINPUT, NULL, "out-of-fold %s %zu of "
                             "%zu is %g, not %s",
                             classify ? "probability" : "estimate", i + 1, n,
                             pred[i], classify ? "between 0 and 1"
                                               : "a finite number");
    }
    return RF_OK;
}

void validate_free(validate_result *r)
{
    if (r == NULL)
        return;
    free(r->folds);
    free(r);
}

rf_status validate_measure(const double *y, const double *pred,
                           const size_t *fold, size_t n, size_t k,
                           int classify, double threshold,
                           validate_result **out, rf_error *err)
{
    assert(out != NULL);
    *out = NULL;
    if (n == 0)
        return error_set(err, RF_EINPUT, NULL,
                         "cross-validation measures need at least one row");
    if (folds_check(n, k, err))
        return err->status;
    assert(y != NULL && pred != NULL && fold != NULL);
    rf_status st = check_inputs(y, pred, n, classify, threshold, err);
    if (st != RF_OK)
        return st;
    for (size_t i = 0; i < n; i++)
        if (fold[i] >= k)
            return error_set(err, RF_EINPUT, NULL, "row %zu of %zu is in "
                             "fold %zu; there are %zu folds (0 to %zu)",
                             i + 1, n, fold[i], k, k - 1);

    validate_result *r = calloc(1, sizeof *r);
    size_t *start = alloc_array(k + 1, sizeof *start);
    size_t *order = alloc_array(n, sizeof *order);
    double *fy = alloc_array(n, sizeof *fy);
    double *fp = alloc_array(n, sizeof *fp);
    double *vals = alloc_array(k, sizeof *vals);
    if (r != NULL)
        r->folds = calloc(k, sizeof *r->folds);
    if (r == NULL || r->folds == NULL || start == NULL || order == NULL
        || fy == NULL || fp == NULL || vals == NULL) {
        st = error_nomem(err, NULL);
        goto fail;
    }
    r->k = k;
    r->classify = classify != 0;

    /* Rows grouped by fold, in row order within a fold (a counting sort):
     * O(n + k) even for leave-one-out, where k = n. */
    for (size_t i = 0; i < n; i++)
        r->folds[fold[i]].rows++;
    start[0] = 0;
    for (size_t f = 0; f < k; f++) {
        if (r->folds[f].rows == 0) {
            st = error_set(err, RF_EINPUT, NULL, "fold %zu of %zu has no "
                           "rows", f + 1, k);
            goto fail;
        }
        start[f + 1] = start[f] + r->folds[f].rows;
    }
    for (size_t i = 0; i < n; i++)
        order[start[fold[i]]++] = i;
    for (size_t f = k; f > 0; f--)  /* start[] was advanced to the ends */
        start[f] = start[f - 1];
    start[0] = 0;

    for (size_t f = 0; f < k; f++) {
        size_t m = 0;
        for (size_t j = start[f]; j < start[f + 1]; j++, m++) {
            fy[m] = y[order[j]];
            fp[m] = pred[order[j]];
        }
        double *v = r->folds[f].m;
        if (!classify) {
            numeric_measures(fy, fp, m, v);
            continue;
        }
        classify_measures cm;
        st = classify_measure(fy, fp, m, threshold, &cm, err);
        if (st != RF_OK)
            goto fail;  /* only RF_ENOMEM: the inputs were checked */
        v[VALIDATE_ACCURACY] = cm.accuracy;
        v[VALIDATE_AUC] = cm.auc;
        v[VALIDATE_LOGLOSS] = cm.logloss;
    }

    if (!classify) {
        numeric_measures(y, pred, n, r->pooled);
    } else {
        st = classify_measure(y, pred, n, threshold, &r->all, err);
        if (st != RF_OK)
            goto fail;
        r->pooled[VALIDATE_ACCURACY] = r->all.accuracy;
        r->pooled[VALIDATE_AUC] = r->all.auc;
        r->pooled[VALIDATE_LOGLOSS] = r->all.logloss;
    }

    /* Mean and standard deviation (divisor used - 1) over the folds where
     * the measure is defined. */
    for (int c = 0; c < VALIDATE_MEASURES; c++) {
        size_t used = 0;
        for (size_t f = 0; f < k; f++)
            if (!isnan(r->folds[f].m[c]))
                vals[used++] = r->folds[f].m[c];
        r->used[c] = used;
        r->mean[c] = used > 0 ? gsl_stats_mean(vals, 1, used) : NAN;
        r->sd[c] = used > 1 ? gsl_stats_sd_m(vals, 1, used, r->mean[c])
                            : NAN;
    }

    free(start);
    free(order);
    free(fy);
    free(fp);
    free(vals);
    *out = r;
    return RF_OK;

fail:
    validate_free(r);
    free(start);
    free(order);
    free(fy);
    free(fp);
    free(vals);
    return st;
}

void validate_calibration_free(validate_calibration *c)
{
    if (c == NULL)
        return;
    free(c->rows);
    free(c->mean_p);
    free(c->rate);
    free(c->p_low);
    free(c->p_high);
    free(c);
}

rf_status validate_calibrate(const double *y, const double *p, size_t n,
                             size_t groups, validate_calibration **out,
                             rf_error *err)
{
    assert(out != NULL);
    *out = NULL;
    if (n == 0)
        return error_set(err, RF_EINPUT, NULL,
                         "a calibration table needs at least one row");
    assert(y != NULL && p != NULL);
    for (size_t i = 0; i < n; i++)
        if (!(y[i] == 0 || y[i] == 1))
            return error_set(err, RF_EINPUT, NULL,
                             "outcome %zu of %zu is %g, not 0 or 1",
                             i + 1, n, y[i]);
    size_t *group = alloc_array(n, sizeof *group);
    if (group == NULL)
        return error_nomem(err, NULL);
    size_t g = 0;
    rf_status st = classify_risk_groups(p, n, groups, group, &g, err);
    if (st != RF_OK) {
        free(group);
        return st;
    }

    validate_calibration *c = calloc(1, sizeof *c);
    if (c != NULL) {
        c->groups = g;
        c->rows = calloc(g, sizeof *c->rows);
        c->mean_p = calloc(g, sizeof *c->mean_p);
        c->rate = calloc(g, sizeof *c->rate);
        c->p_low = malloc(g * sizeof *c->p_low);
        c->p_high = malloc(g * sizeof *c->p_high);
    }
    if (c == NULL || c->rows == NULL || c->mean_p == NULL || c->rate == NULL
        || c->p_low == NULL || c->p_high == NULL) {
        validate_calibration_free(c);
        free(group);
        return error_nomem(err, NULL);
    }
    for (size_t t = 0; t < g; t++) {
        c->p_low[t] = INFINITY;
        c->p_high[t] = -INFINITY;
    }
    /* mean_p is a running mean (as gsl_stats_mean): a group of equal p,
     * which tie blocks make common, then gets exactly that p, where a sum
     * divided by the count can land an ulp above it. rate holds the count
     * of positives (exact) until the division below. */
    for (size_t i = 0; i < n; i++) {
        size_t t = group[i];
        c->rows[t]++;
        c->mean_p[t] += (p[i] - c->mean_p[t]) / (double)c->rows[t];
        c->rate[t] += y[i];
        c->p_low[t] = fmin(c->p_low[t], p[i]);
        c->p_high[t] = fmax(c->p_high[t], p[i]);
    }
    for (size_t t = 0; t < g; t++) {
        /* a mean lies in its range; keep rounding from saying otherwise */
        c->mean_p[t] = fmin(fmax(c->mean_p[t], c->p_low[t]), c->p_high[t]);
        c->rate[t] /= (double)c->rows[t];
    }
    free(group);
    *out = c;
    return RF_OK;
}

size_t validate_choose(const double *err, size_t G, size_t k, double *mean,
                       double *se, size_t *best)
{
    assert(err != NULL && mean != NULL && se != NULL && best != NULL);
    assert(G >= 1 && k >= 2);
    size_t b = G;
    for (size_t g = 0; g < G; g++) {
        const double *e = err + g * k;
        mean[g] = gsl_stats_mean(e, 1, k);
        se[g] = gsl_stats_sd_m(e, 1, k, mean[g]) / sqrt((double)k);
        if (isfinite(mean[g]) && isfinite(se[g])
            && (b == G || mean[g] < mean[b]))
            b = g;
    }
    *best = b;
    if (b == G)
        return G;
    /* the smallest penalty within VALIDATE_CHOOSE_TOL of the best (see
     * validate.h for why not the one-standard-error rule) */
    double cap = mean[b] * (1 + VALIDATE_CHOOSE_TOL);
    for (size_t g = 0; g < b; g++)
        if (isfinite(mean[g]) && isfinite(se[g]) && mean[g] <= cap)
            return g;
    return b;
}
