/*
 * test_validate.c: cross-validation pieces (engine/validate.c) and the risk
 * groups they share with Hosmer-Lemeshow (classify_risk_groups in
 * engine/classify.c). Folds are checked by counting, over many (n, k,
 * class mix, seed) combinations, and against the documented recipe redone
 * here with GSL's generator; measures against values worked by hand in the
 * comments (rmse, mae, r squared), against a direct per-fold loop written
 * here, and the AUC against the Mann-Whitney pair count (Hanley & McNeil
 * 1982, Radiology 143:29); the calibration table by hand; the one-standard-
 * error rule (Hastie, Tibshirani & Friedman, The Elements of Statistical
 * Learning, 2nd ed., sec. 7.10) on hand-made error tables.
 */
#include "testutil.h"

#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_errno.h>
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>

#include "../engine/classify.h"
#include "../engine/validate.h"

#define N(a) (sizeof(a) / sizeof((a)[0]))

static void *xmalloc(size_t bytes)
{
    void *p = malloc(bytes);
    assert_non_null(p);
    return p;
}

static void folds_ok(size_t n, size_t k, unsigned long seed,
                     const double *cls, size_t *fold)
{
    rf_error e = {0};
    rf_status s = validate_folds(n, k, seed, cls, fold, &e);
    if (s != RF_OK)
        fail_msg("validate_folds(%zu, %zu) failed: %s", n, k, e.message);
}

static void folds_fail(size_t n, size_t k, const double *cls,
                       const char *fragment)
{
    size_t fold[8];
    rf_error e = {0};
    assert_int_equal(validate_folds(n, k, 1, cls, fold, &e), RF_EINPUT);
    assert_int_equal(e.status, RF_EINPUT);
    if (strstr(e.message, fragment) == NULL)
        fail_msg("message '%s' lacks '%s'", e.message, fragment);
}

/* Checks every fold number is below k, fold sizes are floor(n/k) or
 * ceil(n/k) with the larger ones first (the deal starts at fold 0), and,
 * with cls, that each class's counts across folds differ by at most 1. */
static void check_balance(const size_t *fold, size_t n, size_t k,
                          const double *cls)
{
    size_t *size = calloc(k, sizeof *size);
    size_t *pos = calloc(k, sizeof *pos);
    assert_non_null(size);
    assert_non_null(pos);
    for (size_t i = 0; i < n; i++) {
        assert_true(fold[i] < k);
        size[fold[i]]++;
        if (cls != NULL && cls[i] == 1)
            pos[fold[i]]++;
    }
    for (size_t f = 0; f < k; f++)
        assert_int_equal(size[f], n / k + (f < n % k ? 1 : 0));
    if (cls != NULL) {
        size_t lo = SIZE_MAX, hi = 0, lo0 = SIZE_MAX, hi0 = 0;
        for (size_t f = 0; f < k; f++) {
            lo = pos[f] < lo ? pos[f] : lo;
            hi = pos[f] > hi ? pos[f] : hi;
            size_t neg = size[f] - pos[f];
            lo0 = neg < lo0 ? neg : lo0;
            hi0 = neg > hi0 ? neg : hi0;
        }
        if (hi - lo > 1 || hi0 - lo0 > 1)
            fail_msg("n %zu k %zu: positives per fold %zu..%zu, negatives "
                     "%zu..%zu", n, k, lo, hi, lo0, hi0);
    }
    free(size);
    free(pos);
}

/* ------------------------------------------------------------- folds */

static void test_validate_folds_sizes_for_many_n_and_k(void **state)
{
    (void)state;
    size_t fold[300];
    long combos = 0;
    for (size_t n = 2; n <= 300; n += (n < 40 ? 1 : 37)) {
        for (size_t k = 2; k <= n && k <= 40; k++) {
            for (unsigned long seed = 0; seed < 3; seed++) {
                folds_ok(n, k, seed * 7919 + 1, NULL, fold);
                check_balance(fold, n, k, NULL);
                combos++;
            }
        }
    }
    print_message("fold sizes: %ld (n, k, seed) combinations\n", combos);
    assert_true(combos > 2000);
}

static void test_validate_folds_stratified_counts(void **state)
{
    (void)state;
    gsl_rng *r = gsl_rng_alloc(gsl_rng_mt19937);
    assert_non_null(r);
    gsl_rng_set(r, 271828UL);
    double cls[257];
    size_t fold[257];
    /* share of positives: none, one row, rare, balanced, most, all */
    const double share[] = {0, -1, 0.07, 0.5, 0.83, 1};
    long combos = 0;
    for (size_t n = 2; n <= 257; n += (n < 30 ? 1 : 23)) {
        for (size_t s = 0; s < N(share); s++) {
            for (size_t i = 0; i < n; i++)
                cls[i] = share[s] < 0 ? (i == n / 2)
                       : gsl_rng_uniform(r) < share[s];
            for (size_t k = 2; k <= n && k <= 25; k += (k < 10 ? 1 : 5)) {
                folds_ok(n, k, 1000 + k, cls, fold);
                check_balance(fold, n, k, cls);
                combos++;
            }
        }
    }
    print_message("stratified folds: %ld (n, class mix, k) combinations\n",
                  combos);
    assert_true(combos > 1000);
    gsl_rng_free(r);
}

/* The recipe of validate.h redone here: mt19937 set with the seed,
 * gsl_ran_shuffle over each class's rows in row order (class 0 first),
 * dealt round-robin on from where the previous class stopped. */
static void recipe(size_t n, size_t k, unsigned long seed, const double *cls,
                   size_t *fold)
{
    gsl_rng *r = gsl_rng_alloc(gsl_rng_mt19937);
    assert_non_null(r);
    gsl_rng_set(r, seed);
    size_t *rows = xmalloc(n * sizeof *rows);
    size_t deal = 0;
    for (int c = 0; c < (cls ? 2 : 1); c++) {
        size_t m = 0;
        for (size_t i = 0; i < n; i++)
            if (!cls || cls[i] == c)
                rows[m++] = i;
        if (m > 0)
            gsl_ran_shuffle(r, rows, m, sizeof *rows);
        for (size_t j = 0; j < m; j++)
            fold[rows[j]] = deal++ % k;
    }
    free(rows);
    gsl_rng_free(r);
}

static void test_validate_folds_follow_the_stated_recipe(void **state)
{
    (void)state;
    enum { n = 97 };
    double cls[n];
    size_t got[n], want[n];
    for (size_t i = 0; i < n; i++)
        cls[i] = (i * 7) % 11 < 3;  /* 27 positives, spread out */
    const unsigned long seeds[] = {1, 2, 20250611UL, 4000000000UL};
    for (size_t s = 0; s < N(seeds); s++) {
        for (size_t k = 2; k <= 10; k += 4) {
            folds_ok(n, k, seeds[s], NULL, got);
            recipe(n, k, seeds[s], NULL, want);
            assert_memory_equal(got, want, sizeof got);
            folds_ok(n, k, seeds[s], cls, got);
            recipe(n, k, seeds[s], cls, want);
            assert_memory_equal(got, want, sizeof got);
        }
    }
}

static void test_validate_folds_same_seed_same_folds(void **state)
{
    (void)state;
    enum { n = 120, k = 5, seeds = 12 };
    static size_t f[seeds][n];
    size_t again[n];
    double cls[n];
    for (size_t i = 0; i < n; i++)
        cls[i] = i % 4 == 1;
    for (unsigned long s = 0; s < seeds; s++) {
        folds_ok(n, k, s + 1, NULL, f[s]);
        folds_ok(n, k, s + 1, NULL, again);
        assert_memory_equal(f[s], again, sizeof again);
        folds_ok(n, k, s + 1, cls, again);  /* stratified: also repeatable */
        size_t twice[n];
        folds_ok(n, k, s + 1, cls, twice);
        assert_memory_equal(again, twice, sizeof twice);
    }
    /* different seeds give different folds (pairwise), and none is the
     * unshuffled deal i mod k */
    for (size_t a = 0; a < seeds; a++) {
        for (size_t b = a + 1; b < seeds; b++)
            assert_true(memcmp(f[a], f[b], sizeof f[a]) != 0);
        size_t same = 0;
        for (size_t i = 0; i < n; i++)
            same += f[a][i] == i % k;
        assert_true(same < n / 2);  /* about n / k expected by chance */
    }
}

/* validate.h: GSL's mt19937 keeps the low 32 bits of the seed, and seed 0
 * is its default seed 4357 (GSL doc/rng.rst; measured). */
static void test_validate_folds_seed_aliases_stated_in_header(void **state)
{
    (void)state;
    enum { n = 50, k = 5 };
    size_t a[n], b[n];
    folds_ok(n, k, 0, NULL, a);
    folds_ok(n, k, 4357, NULL, b);
    assert_memory_equal(a, b, sizeof a);
    if (sizeof(unsigned long) > 4) {
        folds_ok(n, k, 7, NULL, a);
        folds_ok(n, k, (unsigned long)((1ULL << 32) + 7), NULL, b);
        assert_memory_equal(a, b, sizeof a);
    }
    folds_ok(n, k, 1, NULL, a);
    folds_ok(n, k, 4358, NULL, b);
    assert_true(memcmp(a, b, sizeof a) != 0);
}

static void test_validate_folds_leave_one_out(void **state)
{
    (void)state;
    enum { n = 23 };
    size_t fold[n];
    double cls[n];
    for (size_t i = 0; i < n; i++)
        cls[i] = i % 3 == 0;
    for (unsigned long seed = 0; seed < 4; seed++) {
        memset(fold, 0xff, sizeof fold);
        folds_ok(n, n, seed, seed % 2 ? cls : NULL, fold);
        for (size_t i = 0; i < n; i++)
            assert_int_equal(fold[i], i);
    }
    /* the smallest case: two rows, two folds */
    folds_ok(2, 2, 9, NULL, fold);
    assert_int_equal(fold[0], 0);
    assert_int_equal(fold[1], 1);
}

/* Pair count: U / (n1 n0), ties one half; NaN with one class. */
static double auc_pairs(const double *y, const double *p, size_t n)
{
    double u = 0, pairs = 0;
    for (size_t i = 0; i < n; i++)
        for (size_t j = 0; j < n; j++)
            if (y[i] == 1 && y[j] == 0) {
                pairs++;
                u += p[i] > p[j] ? 1 : p[i] == p[j] ? 0.5 : 0;
            }
    return pairs > 0 ? u / pairs : NAN;
}

/* The minority class has fewer rows than folds: 3 positives, 17 negatives,
 * 5 folds of 4. The positives land in 3 different folds; 2 folds have no
 * positive, so their AUC is undefined and the mean AUC is over 3 folds. */
static void test_validate_minority_class_smaller_than_k(void **state)
{
    (void)state;
    enum { n = 20, k = 5 };
    double y[n] = {0}, p[n];
    y[2] = y[11] = y[17] = 1;
    for (size_t i = 0; i < n; i++)  /* distinct, some positives beaten */
        p[i] = 0.05 + 0.045 * (double)((i * 13) % n);
    size_t fold[n];
    for (unsigned long seed = 1; seed <= 30; seed++) {
        folds_ok(n, k, seed, y, fold);
        check_balance(fold, n, k, y);
        size_t pos[k] = {0};
        for (size_t i = 0; i < n; i++)
            pos[fold[i]] += y[i] == 1;
        size_t with = 0;
        for (size_t f = 0; f < k; f++) {
            assert_true(pos[f] <= 1);
            with += pos[f];
        }
        assert_int_equal(with, 3);

        validate_result *r = NULL;
        rf_error e = {0};
        assert_int_equal(validate_measure(y, p, fold, n, k, 1, 0.5, &r, &e),
                         RF_OK);
        double sum = 0;
        for (size_t f = 0; f < k; f++) {
            double fy[n], fp[n];
            size_t m = 0;
            for (size_t i = 0; i < n; i++)
                if (fold[i] == f) {
                    fy[m] = y[i];
                    fp[m++] = p[i];
                }
            double want = auc_pairs(fy, fp, m);
            if (pos[f] == 0) {
                assert_true(isnan(r->folds[f].m[VALIDATE_AUC]));
            } else {
                assert_close(r->folds[f].m[VALIDATE_AUC], want, 1e-15, 0);
                sum += want;
            }
            /* accuracy and log loss stay defined in one-class folds */
            assert_false(isnan(r->folds[f].m[VALIDATE_ACCURACY]));
            assert_false(isnan(r->folds[f].m[VALIDATE_LOGLOSS]));
        }
        assert_int_equal(r->used[VALIDATE_AUC], 3);
        assert_int_equal(r->used[VALIDATE_ACCURACY], k);
        assert_close(r->mean[VALIDATE_AUC], sum / 3, 1e-14, 0);
        assert_close(r->pooled[VALIDATE_AUC], auc_pairs(y, p, n), 1e-15, 0);
        validate_free(r);
    }
}

static void test_validate_folds_reject_bad_input(void **state)
{
    (void)state;
    folds_fail(10, 1, NULL, "at least 2 folds, not 1");
    folds_fail(10, 0, NULL, "at least 2 folds");
    folds_fail(4, 5, NULL, "5 folds need at least 5 rows; there are 4");
    folds_fail(1, 2, NULL, "there is 1");
    folds_fail(0, 2, NULL, "there are 0");
    const double half[] = {0, 1, 0.5, 1};
    folds_fail(4, 2, half, "class 3 of 4 is 0.5, not 0 or 1");
    const double nan[] = {0, 1, 1, NAN};
    folds_fail(4, 2, nan, "class 4 of 4");
    /* the class check comes before leave-one-out's shortcut */
    folds_fail(4, 4, half, "class 3 of 4");
}

/* ---------------------------------------------------------- measures */

static validate_result *measure_ok(const double *y, const double *pred,
                                   const size_t *fold, size_t n, size_t k,
                                   int classify, double threshold)
{
    validate_result *r = NULL;
    rf_error e = {0};
    rf_status s = validate_measure(y, pred, fold, n, k, classify, threshold,
                                   &r, &e);
    if (s != RF_OK)
        fail_msg("validate_measure failed: %s", e.message);
    assert_non_null(r);
    assert_int_equal(r->k, k);
    assert_int_equal(r->classify, classify);
    return r;
}

static void test_validate_numeric_measures_by_hand(void **state)
{
    (void)state;
    /* Fold 0 (rows 1, 3, 5): y 2, 4, 9 (mean 5, SST 9 + 1 + 16 = 26),
     * pred 3, 4, 7: e = -1, 0, 2, SSE 5, sum |e| 3:
     *   rmse sqrt(5/3), mae 1, r2 1 - 5/26 = 21/26.
     * Fold 1 (rows 2, 4, 6): y 1, 6, 8 (mean 5, SST 16 + 1 + 9 = 26),
     * pred 2.5, 6.5, 6: e = -1.5, -0.5, 2, SSE 2.25 + .25 + 4 = 6.5,
     * sum |e| 4: rmse sqrt(6.5/3), mae 4/3, r2 1 - 6.5/26 = 3/4.
     * Pooled: y mean 30/6 = 5, TSS 52, PRESS 11.5, sum |e| 7:
     *   rmse sqrt(11.5/6), mae 7/6, r2 1 - 11.5/52 = 40.5/52. */
    const double y[] = {2, 1, 4, 6, 9, 8};
    const double pred[] = {3, 2.5, 4, 6.5, 7, 6};
    const size_t fold[] = {0, 1, 0, 1, 0, 1};
    validate_result *r = measure_ok(y, pred, fold, 6, 2, 0, 0.5);
    assert_int_equal(r->folds[0].rows, 3);
    assert_int_equal(r->folds[1].rows, 3);
    double rmse0 = sqrt(5.0 / 3), rmse1 = sqrt(6.5 / 3);
    assert_close(r->folds[0].m[VALIDATE_RMSE], rmse0, 1e-15, 0);
    assert_close(r->folds[0].m[VALIDATE_MAE], 1.0, 1e-15, 0);
    assert_close(r->folds[0].m[VALIDATE_R2], 21.0 / 26, 1e-15, 0);
    assert_close(r->folds[1].m[VALIDATE_RMSE], rmse1, 1e-15, 0);
    assert_close(r->folds[1].m[VALIDATE_MAE], 4.0 / 3, 1e-15, 0);
    assert_close(r->folds[1].m[VALIDATE_R2], 0.75, 1e-15, 0);
    assert_close(r->pooled[VALIDATE_RMSE], sqrt(11.5 / 6), 1e-15, 0);
    assert_close(r->pooled[VALIDATE_MAE], 7.0 / 6, 1e-15, 0);
    assert_close(r->pooled[VALIDATE_R2], 40.5 / 52, 1e-15, 0);
    /* two folds: mean (a + b) / 2, sd |a - b| / sqrt(2) (divisor k - 1) */
    assert_close(r->mean[VALIDATE_RMSE], (rmse0 + rmse1) / 2, 1e-15, 0);
    assert_close(r->sd[VALIDATE_RMSE], fabs(rmse0 - rmse1) / sqrt(2), 1e-13,
                 0);
    assert_close(r->mean[VALIDATE_MAE], (1 + 4.0 / 3) / 2, 1e-15, 0);
    assert_close(r->sd[VALIDATE_MAE], (1.0 / 3) / sqrt(2), 1e-13, 0);
    assert_close(r->mean[VALIDATE_R2], (21.0 / 26 + 0.75) / 2, 1e-15, 0);
    assert_close(r->sd[VALIDATE_R2], (21.0 / 26 - 0.75) / sqrt(2), 1e-12, 0);
    for (int c = 0; c < VALIDATE_MEASURES; c++)
        assert_int_equal(r->used[c], 2);
    assert_int_equal(r->all.n, 0);  /* numeric: no classification record */
    validate_free(r);
}

static void test_validate_numeric_r2_can_be_negative(void **state)
{
    (void)state;
    /* predictions worse than the mean: y 1, 2, 3, 4 (mean 2.5, TSS 5),
     * pred 4, 1, 4, 1: e = -3, 1, -1, 3, PRESS 20: r2 = 1 - 20/5 = -3.
     * Folds {rows 1, 2} and {3, 4}: y 1, 2 (SST .5), SSE 10 -> -19;
     * y 3, 4 (SST .5), SSE 10 -> -19. */
    const double y[] = {1, 2, 3, 4};
    const double pred[] = {4, 1, 4, 1};
    const size_t fold[] = {0, 0, 1, 1};
    validate_result *r = measure_ok(y, pred, fold, 4, 2, 0, 0.5);
    assert_close(r->pooled[VALIDATE_R2], -3, 1e-15, 0);
    assert_close(r->folds[0].m[VALIDATE_R2], -19, 1e-15, 0);
    assert_close(r->folds[1].m[VALIDATE_R2], -19, 1e-15, 0);
    assert_close(r->sd[VALIDATE_R2], 0, 0, 0);
    validate_free(r);
}

static void test_validate_numeric_leave_one_out(void **state)
{
    (void)state;
    /* one row per fold: rmse = mae = |e|; r2 undefined in every fold
     * (SST 0), pooled r2 = 1 - PRESS / TSS.
     * y 10.5, 12, 9, 14.5 (mean 11.5, TSS 1 + .25 + 6.25 + 9 = 16.5);
     * pred 11, 11.25, 10, 13: e = -.5, .75, -1, 1.5, PRESS .25 + .5625
     * + 1 + 2.25 = 4.0625, sum |e| 3.75. */
    enum { n = 4 };
    const double y[n] = {10.5, 12, 9, 14.5};
    const double pred[n] = {11, 11.25, 10, 13};
    size_t fold[n];
    folds_ok(n, n, 1, NULL, fold);
    validate_result *r = measure_ok(y, pred, fold, n, n, 0, 0.5);
    const double e[n] = {.5, .75, 1, 1.5};
    for (size_t f = 0; f < n; f++) {
        assert_int_equal(r->folds[f].rows, 1);
        assert_close(r->folds[f].m[VALIDATE_RMSE], e[f], 1e-15, 0);
        assert_close(r->folds[f].m[VALIDATE_MAE], e[f], 1e-15, 0);
        assert_true(isnan(r->folds[f].m[VALIDATE_R2]));
    }
    assert_int_equal(r->used[VALIDATE_R2], 0);
    assert_true(isnan(r->mean[VALIDATE_R2]));
    assert_true(isnan(r->sd[VALIDATE_R2]));
    assert_close(r->mean[VALIDATE_MAE], 3.75 / 4, 1e-15, 0);
    assert_close(r->pooled[VALIDATE_MAE], 3.75 / 4, 1e-15, 0);
    assert_close(r->pooled[VALIDATE_RMSE], sqrt(4.0625 / 4), 1e-15, 0);
    assert_close(r->pooled[VALIDATE_R2], 1 - 4.0625 / 16.5, 1e-15, 0);
    validate_free(r);
}

/* A direct loop per fold (scan all rows for each fold, two passes in
 * double), independent of validate.c's grouping by counting sort. */
static void direct_numeric(const double *y, const double *pred,
                           const size_t *fold, size_t n, size_t f,
                           double out[3])
{
    double sy = 0, m = 0;
    for (size_t i = 0; i < n; i++)
        if (fold[i] == f) {
            sy += y[i];
            m++;
        }
    double ybar = sy / m, sse = 0, sae = 0, sst = 0;
    for (size_t i = 0; i < n; i++)
        if (fold[i] == f) {
            double e = y[i] - pred[i];
            sse += e * e;
            sae += fabs(e);
            sst += (y[i] - ybar) * (y[i] - ybar);
        }
    out[0] = sqrt(sse / m);
    out[1] = sae / m;
    out[2] = 1 - sse / sst;
}

static void test_validate_numeric_matches_direct_loop(void **state)
{
    (void)state;
    enum { n = 1003, k = 7 };
    double *y = xmalloc(n * sizeof *y), *pred = xmalloc(n * sizeof *pred);
    size_t *fold = xmalloc(n * sizeof *fold);
    gsl_rng *g = gsl_rng_alloc(gsl_rng_mt19937);
    assert_non_null(g);
    gsl_rng_set(g, 5150UL);
    for (size_t i = 0; i < n; i++) {
        double x = gsl_rng_uniform(g) * 40;
        y[i] = 183.7 + 2.385 * x + gsl_ran_gaussian(g, 6.1);
        pred[i] = 181.2 + 2.42 * x;
    }
    folds_ok(n, k, 3, NULL, fold);
    validate_result *r = measure_ok(y, pred, fold, n, k, 0, 0.5);
    double mean[3] = {0}, all[k][3];
    for (size_t f = 0; f < k; f++) {
        direct_numeric(y, pred, fold, n, f, all[f]);
        for (int c = 0; c < 3; c++) {
            assert_close(r->folds[f].m[c], all[f][c], 1e-12, 0);
            mean[c] += all[f][c] / k;
        }
    }
    for (int c = 0; c < 3; c++) {
        double ss = 0;
        for (size_t f = 0; f < k; f++)
            ss += (all[f][c] - mean[c]) * (all[f][c] - mean[c]);
        assert_close(r->mean[c], mean[c], 1e-12, 0);
        assert_close(r->sd[c], sqrt(ss / (k - 1)), 1e-9, 0);
    }
    size_t one[n];  /* pooled = one fold holding every row */
    memset(one, 0, sizeof one);
    double pooled[3];
    direct_numeric(y, pred, one, n, 0, pooled);
    for (int c = 0; c < 3; c++)
        assert_close(r->pooled[c], pooled[c], 1e-12, 0);
    /* the predictions are good: a sanity check that the data is real */
    assert_true(pooled[2] > 0.8 && pooled[2] < 1);
    validate_free(r);
    gsl_rng_free(g);
    free(y);
    free(pred);
    free(fold);
}

/* The check case of /work/shared/spec/libraries.md, "Diagnostic formulas
 * and their textbook sources": y = (1,1,0,1,0,0), p = (.9,.8,.7,.6,.55,.4)
 * give AUC 0.8889. Two folds, rows 1-3 and 4-6:
 *   fold 0: y 1, 1, 0, p .9, .8, .7: both positives beat .7: AUC 1;
 *     at .5 all predicted yes: accuracy 2/3;
 *     log loss -(ln .9 + ln .8 + ln .3) / 3.
 *   fold 1: y 1, 0, 0, p .6, .55, .4: AUC 1; .6 yes (right), .55 yes
 *     (wrong), .4 no (right): accuracy 2/3;
 *     log loss -(ln .6 + ln .45 + ln .6) / 3.
 * Pooled: AUC 8/9, accuracy 4/6 (tp 3, fp 2, tn 1, fn 0). */
static void test_validate_classify_by_hand(void **state)
{
    (void)state;
    const double y[] = {1, 1, 0, 1, 0, 0};
    const double p[] = {.9, .8, .7, .6, .55, .4};
    const size_t fold[] = {0, 0, 0, 1, 1, 1};
    validate_result *r = measure_ok(y, p, fold, 6, 2, 1, 0.5);
    double ll0 = -(log(.9) + log(.8) + log(.3)) / 3;
    double ll1 = -(log(.6) + log(.45) + log(.6)) / 3;
    assert_close(r->folds[0].m[VALIDATE_AUC], 1, 0, 0);
    assert_close(r->folds[1].m[VALIDATE_AUC], 1, 0, 0);
    assert_close(r->folds[0].m[VALIDATE_ACCURACY], 2.0 / 3, 1e-15, 0);
    assert_close(r->folds[1].m[VALIDATE_ACCURACY], 2.0 / 3, 1e-15, 0);
    assert_close(r->folds[0].m[VALIDATE_LOGLOSS], ll0, 1e-14, 0);
    assert_close(r->folds[1].m[VALIDATE_LOGLOSS], ll1, 1e-14, 0);
    assert_close(r->pooled[VALIDATE_AUC], 0.8889, 0, 5e-5);
    assert_close(r->pooled[VALIDATE_AUC], 8.0 / 9, 1e-15, 0);
    assert_close(r->pooled[VALIDATE_ACCURACY], 4.0 / 6, 1e-15, 0);
    assert_close(r->pooled[VALIDATE_LOGLOSS],
                 (3 * ll0 + 3 * ll1) / 6, 1e-14, 0);
    assert_close(r->mean[VALIDATE_LOGLOSS], (ll0 + ll1) / 2, 1e-14, 0);
    assert_close(r->sd[VALIDATE_LOGLOSS], fabs(ll0 - ll1) / sqrt(2), 1e-12,
                 0);
    assert_close(r->sd[VALIDATE_AUC], 0, 0, 0);
    assert_int_equal(r->all.tp, 3);
    assert_int_equal(r->all.fp, 2);
    assert_int_equal(r->all.tn, 1);
    assert_int_equal(r->all.fn, 0);
    validate_free(r);

    /* the threshold moves accuracy only, and is inclusive: at .7 fold 0
     * still calls .7 a yes (2/3); at .75, .9 and .8 are yes and .7 no, all
     * right (3/3), and fold 1 is all no: .6 wrong, .55 and .4 right (2/3) */
    r = measure_ok(y, p, fold, 6, 2, 1, 0.7);
    assert_close(r->folds[0].m[VALIDATE_ACCURACY], 2.0 / 3, 1e-15, 0);
    validate_free(r);
    r = measure_ok(y, p, fold, 6, 2, 1, 0.75);
    assert_close(r->folds[0].m[VALIDATE_ACCURACY], 1, 0, 0);
    assert_close(r->folds[1].m[VALIDATE_ACCURACY], 2.0 / 3, 1e-15, 0);
    assert_close(r->folds[0].m[VALIDATE_AUC], 1, 0, 0);
    validate_free(r);
}

static void test_validate_classify_matches_pair_counts(void **state)
{
    (void)state;
    enum { n = 211, k = 6 };
    double y[n], p[n];
    size_t fold[n];
    gsl_rng *g = gsl_rng_alloc(gsl_rng_mt19937);
    assert_non_null(g);
    gsl_rng_set(g, 86420UL);
    for (size_t i = 0; i < n; i++) {
        /* eleven levels, so many ties within and across folds */
        p[i] = 0.04 + 0.09 * (double)gsl_rng_uniform_int(g, 11);
        y[i] = gsl_rng_uniform(g) < p[i];
    }
    folds_ok(n, k, 77, y, fold);
    const double t = 0.42;
    validate_result *r = measure_ok(y, p, fold, n, k, 1, t);
    for (size_t f = 0; f < k; f++) {
        double fy[n], fp[n], right = 0, ll = 0;
        size_t m = 0;
        for (size_t i = 0; i < n; i++)
            if (fold[i] == f) {
                fy[m] = y[i];
                fp[m++] = p[i];
                right += (p[i] >= t) == (y[i] == 1);
                ll -= y[i] == 1 ? log(p[i]) : log(1 - p[i]);
            }
        assert_int_equal(r->folds[f].rows, m);
        assert_close(r->folds[f].m[VALIDATE_AUC], auc_pairs(fy, fp, m),
                     1e-14, 0);
        assert_close(r->folds[f].m[VALIDATE_ACCURACY], right / m, 1e-15, 0);
        assert_close(r->folds[f].m[VALIDATE_LOGLOSS], ll / m, 1e-13, 0);
    }
    assert_close(r->pooled[VALIDATE_AUC], auc_pairs(y, p, n), 1e-14, 0);
    assert_true(r->pooled[VALIDATE_AUC] > 0.6);
    gsl_rng_free(g);
    validate_free(r);
}

static void measure_fails(const double *y, const double *pred,
                          const size_t *fold, size_t n, size_t k,
                          int classify, double threshold,
                          const char *fragment)
{
    validate_result *r = (validate_result *)&r;  /* must become NULL */
    rf_error e = {0};
    assert_int_equal(validate_measure(y, pred, fold, n, k, classify,
                                      threshold, &r, &e), RF_EINPUT);
    assert_null(r);
    assert_int_equal(e.status, RF_EINPUT);
    if (strstr(e.message, fragment) == NULL)
        fail_msg("message '%s' lacks '%s'", e.message, fragment);
}

static void test_validate_measure_rejects_bad_input(void **state)
{
    (void)state;
    const double y[] = {1, 0, 1, 0};
    const double p[] = {.7, .2, .6, .45};
    const size_t fold[] = {0, 1, 0, 1};
    measure_fails(y, p, fold, 0, 2, 1, 0.5, "at least one row");
    measure_fails(y, p, fold, 4, 1, 1, 0.5, "at least 2 folds, not 1");
    measure_fails(y, p, fold, 4, 5, 0, 0.5,
                  "5 folds need at least 5 rows; there are 4");
    measure_fails(y, p, fold, 1, 2, 0, 0.5, "there is 1");
    const size_t big[] = {0, 1, 2, 1};
    measure_fails(y, p, big, 4, 2, 1, 0.5, "row 3 of 4 is in fold 2");
    const size_t gap[] = {0, 2, 0, 2};
    measure_fails(y, p, gap, 4, 3, 1, 0.5, "fold 2 of 3 has no rows");
    const double y2[] = {1, 0, 2, 0};
    measure_fails(y2, p, fold, 4, 2, 1, 0.5, "outcome 3 of 4 is 2");
    const double pb[] = {.7, 1.2, .6, .45};
    measure_fails(y, pb, fold, 4, 2, 1, 0.5,
                  "out-of-fold probability 2 of 4");
    measure_fails(y, p, fold, 4, 2, 1, NAN, "threshold");
    const double yn[] = {1, NAN, 3, 4};
    measure_fails(yn, p, fold, 4, 2, 0, 0.5, "outcome 2 of 4");
    const double pi[] = {1, 2, INFINITY, 4};
    measure_fails(y, pi, fold, 4, 2, 0, 0.5, "out-of-fold estimate 3 of 4");
    /* numeric ignores the threshold and accepts any finite y */
    validate_result *r = measure_ok(yn + 2, p, fold, 2, 2, 0, NAN);
    validate_free(r);
}

/* ------------------------------------------------------- calibration */

static validate_calibration *calibrate_ok(const double *y, const double *p,
                                          size_t n, size_t groups)
{
    validate_calibration *c = NULL;
    rf_error e = {0};
    if (validate_calibrate(y, p, n, groups, &c, &e) != RF_OK)
        fail_msg("validate_calibrate failed: %s", e.message);
    assert_non_null(c);
    return c;
}

static void test_validate_calibration_by_hand(void **state)
{
    (void)state;
    /* 12 distinct p in scrambled order, 4 groups: targets floor(12 k / 4)
     * = 3, 6, 9, 12, so three rows each, in order of p:
     *   .11 .17 .23 (y 0 0 1): mean .17,  rate 1/3
     *   .34 .38 .45 (y 0 1 0): mean .39,  rate 1/3
     *   .52 .61 .66 (y 1 0 1): mean .59667, rate 2/3
     *   .72 .85 .93 (y 1 1 1): mean .83333, rate 1 */
    const double ps[] = {.11, .17, .23, .34, .38, .45,
                         .52, .61, .66, .72, .85, .93};
    const double ys[] = {0, 0, 1, 0, 1, 0, 1, 0, 1, 1, 1, 1};
    double p[12], y[12];
    for (size_t i = 0; i < 12; i++) {  /* i -> 5 i mod 12 */
        p[(5 * i) % 12] = ps[i];
        y[(5 * i) % 12] = ys[i];
    }
    validate_calibration *c = calibrate_ok(y, p, 12, 4);
    assert_int_equal(c->groups, 4);
    const double mean[] = {(.11 + .17 + .23) / 3, (.34 + .38 + .45) / 3,
                           (.52 + .61 + .66) / 3, (.72 + .85 + .93) / 3};
    const double rate[] = {1.0 / 3, 1.0 / 3, 2.0 / 3, 1};
    for (size_t t = 0; t < 4; t++) {
        assert_int_equal(c->rows[t], 3);
        assert_close(c->mean_p[t], mean[t], 1e-15, 0);
        assert_close(c->rate[t], rate[t], 1e-15, 0);
        assert_close(c->p_low[t], ps[3 * t], 0, 0);
        assert_close(c->p_high[t], ps[3 * t + 2], 0, 0);
    }
    validate_calibration_free(c);

    /* targets are floored: 7 rows, 3 groups: floor(7 k / 3) = 2, 4, 7
     * give sizes 2, 2, 3 (ceilings, 3, 5, 7, would give 3, 2, 2); 14
     * rows, 4 groups: floor(3.5) = 3, 7, floor(10.5) = 10, 14 give 3, 4,
     * 3, 4 */
    c = calibrate_ok(ys, ps, 7, 3);
    assert_int_equal(c->groups, 3);
    assert_int_equal(c->rows[0], 2);
    assert_int_equal(c->rows[1], 2);
    assert_int_equal(c->rows[2], 3);
    assert_close(c->p_high[0], .17, 0, 0);
    assert_close(c->p_low[2], .38, 0, 0);
    validate_calibration_free(c);
    double p14[14], y14[14] = {0};
    for (size_t i = 0; i < 14; i++)
        p14[i] = 0.031 + 0.067 * (double)((i * 3) % 14);
    c = calibrate_ok(y14, p14, 14, 4);
    assert_int_equal(c->groups, 4);
    const size_t size14[] = {3, 4, 3, 4};
    for (size_t t = 0; t < 4; t++)
        assert_int_equal(c->rows[t], size14[t]);
    validate_calibration_free(c);

    /* more groups than rows: one row each */
    c = calibrate_ok(y, p, 12, 50);
    assert_int_equal(c->groups, 12);
    for (size_t t = 0; t < 12; t++) {
        assert_int_equal(c->rows[t], 1);
        assert_close(c->mean_p[t], ps[t], 0, 0);
        assert_close(c->rate[t], ys[t], 0, 0);
    }
    validate_calibration_free(c);

    /* one group: everything */
    c = calibrate_ok(y, p, 12, 1);
    assert_int_equal(c->groups, 1);
    assert_int_equal(c->rows[0], 12);
    assert_close(c->rate[0], 7.0 / 12, 1e-15, 0);
    assert_close(c->p_low[0], .11, 0, 0);
    assert_close(c->p_high[0], .93, 0, 0);
    validate_calibration_free(c);
}

static void test_validate_calibration_keeps_ties_together(void **state)
{
    (void)state;
    /* 10 rows, 5 groups (targets 2, 4, 6, 8, 10); p sorted: .1, .3 .3 .3,
     * .5, .6, .7 .7 .7 .7. After .1 the count is 1 < 2; the .3 block
     * brings it to 4 >= 2: group {.1, .3 x3}, next target 6 (4 is
     * reached); .5 -> 5, .6 -> 6 >= 6: group {.5, .6}, next target 8;
     * the .7 block -> 10, the end: group {.7 x4}. Three groups. */
    const double p[] = {.7, .3, .1, .7, .5, .3, .7, .6, .3, .7};
    const double y[] = {1, 0, 0, 1, 1, 1, 0, 0, 0, 1};
    validate_calibration *c = calibrate_ok(y, p, 10, 5);
    assert_int_equal(c->groups, 3);
    assert_int_equal(c->rows[0], 4);
    assert_int_equal(c->rows[1], 2);
    assert_int_equal(c->rows[2], 4);
    assert_close(c->mean_p[0], (.1 + .3 + .3 + .3) / 4, 1e-15, 0);
    assert_close(c->rate[0], 1.0 / 4, 0, 0);
    assert_close(c->mean_p[1], (.5 + .6) / 2, 1e-15, 0);
    assert_close(c->rate[1], 1.0 / 2, 0, 0);
    assert_close(c->mean_p[2], .7, 0, 0);  /* exactly: a running mean */
    assert_close(c->rate[2], 3.0 / 4, 0, 0);
    assert_close(c->p_low[2], .7, 0, 0);
    assert_close(c->p_high[2], .7, 0, 0);
    validate_calibration_free(c);

    /* classify_risk_groups gives each row its group, lowest p first */
    size_t group[10], g = 0;
    rf_error e = {0};
    assert_int_equal(classify_risk_groups(p, 10, 5, group, &g, &e), RF_OK);
    assert_int_equal(g, 3);
    const size_t want[] = {2, 0, 0, 2, 1, 0, 2, 1, 0, 2};
    assert_memory_equal(group, want, sizeof want);
}

/* Hosmer-Lemeshow C summed from the calibration table at ten groups
 * (o - e)^2 / (e (1 - e / n)) per group, with o = rows x rate, e = rows x
 * mean p (Hosmer, Lemeshow & Sturdivant 2013, sec. 5.2.2) must give
 * classify_measure's statistic: the two share the grouping rule. p avoids
 * 0 and 1, so classify.c merges no group. */
static void test_validate_calibration_groups_are_the_hl_groups(void **state)
{
    (void)state;
    gsl_rng *g = gsl_rng_alloc(gsl_rng_mt19937);
    assert_non_null(g);
    gsl_rng_set(g, 1618UL);
    const size_t sizes[] = {7, 10, 23, 64, 500, 4001};
    for (size_t s = 0; s < N(sizes); s++) {
        for (int ties = 0; ties < 2; ties++) {
            size_t n = sizes[s];
            double *y = xmalloc(n * sizeof *y), *p = xmalloc(n * sizeof *p);
            for (size_t i = 0; i < n; i++) {
                p[i] = ties ? 0.05 + 0.1 * (double)gsl_rng_uniform_int(g, 9)
                            : 0.02 + 0.96 * gsl_rng_uniform(g);
                y[i] = gsl_rng_uniform(g) < p[i];
            }
            classify_measures m;
            rf_error e = {0};
            assert_int_equal(classify_measure(y, p, n, 0.5, &m, &e), RF_OK);
            validate_calibration *c = calibrate_ok(y, p, n, 10);
            assert_int_equal(c->groups, (size_t)m.hl_groups);
            double hl = 0;
            size_t rows = 0;
            for (size_t t = 0; t < c->groups; t++) {
                double nk = (double)c->rows[t];
                double o = nk * c->rate[t], ex = nk * c->mean_p[t];
                hl += (o - ex) * (o - ex) / (ex * (1 - ex / nk));
                rows += c->rows[t];
                assert_true(c->p_low[t] <= c->mean_p[t]);
                assert_true(c->mean_p[t] <= c->p_high[t]);
                if (t > 0)  /* groups ascend and never share a p */
                    assert_true(c->p_low[t] > c->p_high[t - 1]);
            }
            assert_int_equal(rows, n);
            if (m.hl_groups >= 3)
                assert_close(hl, m.hl_stat, 1e-11, 0);
            else
                assert_true(isnan(m.hl_stat));
            validate_calibration_free(c);
            free(y);
            free(p);
        }
    }
    gsl_rng_free(g);
}

static void test_validate_calibration_rejects_bad_input(void **state)
{
    (void)state;
    const double y[] = {1, 0, 1};
    const double p[] = {.61, .27, .83};
    validate_calibration *c = (validate_calibration *)&c;
    rf_error e = {0};
    assert_int_equal(validate_calibrate(y, p, 0, 10, &c, &e), RF_EINPUT);
    assert_null(c);
    assert_non_null(strstr(e.message, "at least one row"));
    const double y2[] = {1, 0.5, 1};
    assert_int_equal(validate_calibrate(y2, p, 3, 10, &c, &e), RF_EINPUT);
    assert_non_null(strstr(e.message, "outcome 2 of 3 is 0.5"));
    const double p2[] = {.61, .27, NAN};
    assert_int_equal(validate_calibrate(y, p2, 3, 10, &c, &e), RF_EINPUT);
    assert_non_null(strstr(e.message, "probability 3 of 3"));
    assert_int_equal(validate_calibrate(y, p, 3, 0, &c, &e), RF_EINPUT);
    assert_non_null(strstr(e.message, "0 groups"));
    assert_int_equal(validate_calibrate(y, p, 3, CLASSIFY_GROUPS_MAX + 1, &c,
                                        &e), RF_EINPUT);
    assert_non_null(strstr(e.message, "from 1 to 1000"));
    assert_null(c);
}

/* ------------------------------------------------------ the ridge choice */

static void test_validate_choose_by_hand(void **state)
{
    (void)state;
    /* G = 4 penalties, k = 3 folds:
     *   0: 5, 6, 7       mean 6, sd 1
     *   1: 5.004, 5.0, 4.999  mean 5.001  (within 0.1% of 5: 5.005)
     *   2: 4, 5, 6       mean 5, sd 1, se 1/sqrt 3   <- best
     *   3: 6, 6, 6.3     mean 6.1
     * chosen: 1, the smallest penalty within 0.1% of the best. */
    const double err[] = {5, 6, 7, 5.004, 5.0, 4.999, 4, 5, 6, 6, 6, 6.3};
    double mean[4], se[4];
    size_t best = 99;
    assert_int_equal(validate_choose(err, 4, 3, mean, se, &best), 1);
    assert_int_equal(best, 2);
    assert_close(mean[0], 6, 1e-15, 0);
    assert_close(mean[1], 5.001, 1e-15, 0);
    assert_close(mean[2], 5, 1e-15, 0);
    assert_close(mean[3], 6.1, 1e-15, 0);
    assert_close(se[2], 1 / sqrt(3), 1e-15, 0);
    /* sd of 6, 6, 6.3: mean 6.1, squares .01 + .01 + .04 = .06, / 2 */
    assert_close(se[3], sqrt(0.03) / sqrt(3), 1e-13, 0);
    /* penalty 1 just outside the tolerance: best is chosen */
    const double out[] = {5, 6, 7, 5.006, 5.006, 5.006, 4, 5, 6, 6, 6, 6.3};
    assert_int_equal(validate_choose(out, 4, 3, mean, se, &best), 2);
    assert_int_equal(best, 2);
}

static void test_validate_choose_ties_flat_and_edges(void **state)
{
    (void)state;
    double mean[5], se[5];
    size_t best;

    /* a tie at the minimum: the first (smaller penalty) is best and
     * chosen */
    const double tie[] = {3, 4, 5, 5, 4, 3, 10, 10, 10};
    assert_int_equal(validate_choose(tie, 3, 3, mean, se, &best), 0);
    assert_int_equal(best, 0);
    assert_true(mean[0] == mean[1]);

    /* a flat curve (every penalty the same errors): no penalty */
    const double flat[] = {2.5, 3.1, 2.8, 2.5, 3.1, 2.8, 2.5, 3.1, 2.8,
                           2.5, 3.1, 2.8, 2.5, 3.1, 2.8};
    assert_int_equal(validate_choose(flat, 5, 3, mean, se, &best), 0);
    assert_int_equal(best, 0);

    /* the minimum at the largest penalty, the others well above: best and
     * chosen the same */
    const double down[] = {9, 9.5, 8, 8.5, 7, 7.5, 6, 6.5};
    assert_int_equal(validate_choose(down, 4, 2, mean, se, &best), 3);
    assert_int_equal(best, 3);

    /* the minimum at the smallest penalty: chosen = best = 0 */
    const double up[] = {1, 1.2, 3, 3.2, 5, 5.2};
    assert_int_equal(validate_choose(up, 3, 2, mean, se, &best), 0);
    assert_int_equal(best, 0);

    /* a curve that falls, rises and falls again to its minimum: the first
     * penalty within the tolerance of the minimum, not the nearest to it.
     * Means 4.1, 2.001, 4.2, 2.9, 2; best 4; 2.001 <= 2.002: chosen 1 */
    const double back[] = {4, 4.2, 2.0, 2.002, 4, 4.4, 2.8, 3.0, 1, 3};
    assert_int_equal(validate_choose(back, 5, 2, mean, se, &best), 1);
    assert_int_equal(best, 4);
}

static void test_validate_choose_band_edge_is_inclusive(void **state)
{
    (void)state;
    /* best 1 at mean exactly 2; penalty 0 at exactly 2 (1 + 1e-3), and,
     * in a second table, a hair above */
    double mean[2], se[2];
    size_t best;
    double edge = 2 * (1 + VALIDATE_CHOOSE_TOL);
    double above = nextafter(edge, INFINITY);
    double in[] = {edge, edge, 1, 3};
    assert_int_equal(validate_choose(in, 2, 2, mean, se, &best), 0);
    assert_int_equal(best, 1);
    assert_true(mean[0] == edge);
    double out[] = {above, above, 1, 3};
    assert_int_equal(validate_choose(out, 2, 2, mean, se, &best), 1);
    assert_true(mean[0] > edge);
}

static void test_validate_choose_skips_failed_penalties(void **state)
{
    (void)state;
    double mean[4], se[4];
    size_t best;
    /* penalty 0 failed in one fold (NaN) though its other fold is the
     * lowest error of all; 1 (mean 3.2) is within the tolerance of 2
     * (mean 3.1985, best); 3 failed in a fold: chosen 1 */
    const double err[] = {0.5, NAN, 3, 3.4, 3.197, 3.2, NAN, 3.1};
    assert_int_equal(validate_choose(err, 4, 2, mean, se, &best), 1);
    assert_int_equal(best, 2);
    assert_true(isnan(mean[0]));
    const double all[] = {NAN, 1, INFINITY, 2};
    assert_int_equal(validate_choose(all, 2, 2, mean, se, &best), 2);
    assert_int_equal(best, 2);
}

int main(void)
{
    gsl_set_error_handler_off();  /* as main() does: errors are returned */
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_validate_folds_sizes_for_many_n_and_k),
        cmocka_unit_test(test_validate_folds_stratified_counts),
        cmocka_unit_test(test_validate_folds_follow_the_stated_recipe),
        cmocka_unit_test(test_validate_folds_same_seed_same_folds),
        cmocka_unit_test(test_validate_folds_seed_aliases_stated_in_header),
        cmocka_unit_test(test_validate_folds_leave_one_out),
        cmocka_unit_test(test_validate_minority_class_smaller_than_k),
        cmocka_unit_test(test_validate_folds_reject_bad_input),
        cmocka_unit_test(test_validate_numeric_measures_by_hand),
        cmocka_unit_test(test_validate_numeric_r2_can_be_negative),
        cmocka_unit_test(test_validate_numeric_leave_one_out),
        cmocka_unit_test(test_validate_numeric_matches_direct_loop),
        cmocka_unit_test(test_validate_classify_by_hand),
        cmocka_unit_test(test_validate_classify_matches_pair_counts),
        cmocka_unit_test(test_validate_measure_rejects_bad_input),
        cmocka_unit_test(test_validate_calibration_by_hand),
        cmocka_unit_test(test_validate_calibration_keeps_ties_together),
        cmocka_unit_test(test_validate_calibration_groups_are_the_hl_groups),
        cmocka_unit_test(test_validate_calibration_rejects_bad_input),
        cmocka_unit_test(test_validate_choose_by_hand),
        cmocka_unit_test(test_validate_choose_ties_flat_and_edges),
        cmocka_unit_test(test_validate_choose_band_edge_is_inclusive),
        cmocka_unit_test(test_validate_choose_skips_failed_penalties),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
