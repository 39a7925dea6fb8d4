/*
 * test_classify.c: classification measures (engine/classify.c) against
 * answers computed here by independent means: the AUC against the
 * Mann-Whitney statistic counted pair by pair in O(n^2), the check values
 * of /work/shared/spec/libraries.md ("Diagnostic formulas and their
 * textbook sources": "Computed check values"), log loss and Brier score
 * written out term by term, Hosmer-Lemeshow C summed by hand over groups
 * listed explicitly in the test, and a seeded calibrated sample. Also the
 * undefined cases (one class, all p equal, few rows) and every input error.
 */
#include "testutil.h"

#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_errno.h>
#include <gsl/gsl_rng.h>

#include "../engine/classify.h"

#define N(a) (sizeof(a) / sizeof((a)[0]))

static classify_measures measure_ok(const double *y, const double *p,
                                    size_t n, double threshold)
{
    classify_measures m;
    rf_error e = {0};
    rf_status s = classify_measure(y, p, n, threshold, &m, &e);
    if (s != RF_OK)
        fail_msg("classify_measure failed: %s", e.message);
    assert_int_equal(m.n, n);
    return m;
}

/* Expects RF_EINPUT with fragment in the message and *out left zeroed. */
static void measure_fails(const double *y, const double *p, size_t n,
                          double threshold, const char *fragment)
{
    classify_measures m;
    memset(&m, 0x5a, sizeof m);
    rf_error e = {0};
    rf_status s = classify_measure(y, p, n, threshold, &m, &e);
    assert_int_equal(s, RF_EINPUT);
    assert_int_equal(e.status, RF_EINPUT);
    assert_int_equal(m.n, 0);
    assert_int_equal(m.tp + m.fp + m.tn + m.fn, 0);
    if (strstr(e.message, fragment) == NULL)
        fail_msg("message '%s' lacks '%s'", e.message, fragment);
}

/* Mann-Whitney U / (n1 n0) by counting every (positive, negative) pair,
 * a tie counting one half (Hanley & McNeil 1982, Radiology 143:29). */
static double auc_pairs(const double *y, const double *p, size_t n)
{
    double u = 0, pairs = 0;
    for (size_t i = 0; i < n; i++) {
        if (y[i] != 1)
            continue;
        for (size_t j = 0; j < n; j++) {
            if (y[j] != 0)
                continue;
            pairs++;
            u += p[i] > p[j] ? 1 : p[i] == p[j] ? 0.5 : 0;
        }
    }
    return u / pairs;
}

/* One Hosmer-Lemeshow term over rows [from, to) of (y, p). */
static double hl_term(const double *y, const double *p, size_t from,
                      size_t to)
{
    double nk = 0, o = 0, e = 0;
    for (size_t i = from; i < to; i++) {
        nk++;
        o += y[i];
        e += p[i];
    }
    double pbar = e / nk;
    return (o - e) * (o - e) / (nk * pbar * (1 - pbar));
}

/* The check case of /work/shared/spec/libraries.md, "Diagnostic formulas
 * and their textbook sources": "Computed check values". */
static const double spec_y[] = {1, 1, 0, 1, 0, 0};
static const double spec_p[] = {.9, .8, .7, .6, .55, .4};

static void test_classify_spec_case_auc_and_brier(void **state)
{
    (void)state;
    classify_measures m = measure_ok(spec_y, spec_p, 6, 0.5);
    /* libraries.md check values: AUC 0.8889 (= 8/9: the positives .9 and
     * .8 beat all three negatives, .6 beats .55 and .4), Brier 0.19375. */
    assert_close(m.auc, 0.8889, 0, 5e-5);
    assert_close(m.auc, 8.0 / 9.0, 1e-15, 0);
    assert_close(m.brier, 0.19375, 1e-14, 0);
    assert_close(m.auc, auc_pairs(spec_y, spec_p, 6), 1e-15, 0);
}

static void test_classify_spec_case_log_loss_by_hand(void **state)
{
    (void)state;
    classify_measures m = measure_ok(spec_y, spec_p, 6, 0.5);
    /* -mean(y ln p + (1 - y) ln(1 - p)), term by term: */
    double hand = -(log(.9) + log(.8) + log(1 - .7) + log(.6) + log(1 - .55)
                    + log(1 - .4)) / 6;
    assert_close(m.logloss, hand, 1e-14, 0);
    /* the same by hand with six-figure logarithms:
     * (0.105361 + 0.223144 + 1.203973 + 0.510826 + 0.798508 + 0.510826)/6 */
    assert_close(m.logloss, 0.558773, 0, 1e-6);
}

static void test_classify_confusion_and_rates_at_half(void **state)
{
    (void)state;
    classify_measures m = measure_ok(spec_y, spec_p, 6, 0.5);
    /* p >= .5: .9 (yes), .8 (yes), .7 (no), .6 (yes), .55 (no) -> 3 tp,
     * 2 fp; p < .5: .4 (no) -> 1 tn, 0 fn */
    assert_int_equal(m.tp, 3);
    assert_int_equal(m.fp, 2);
    assert_int_equal(m.tn, 1);
    assert_int_equal(m.fn, 0);
    assert_close(m.threshold, 0.5, 0, 0);
    assert_close(m.accuracy, 4.0 / 6, 1e-15, 0);
    assert_close(m.precision, 3.0 / 5, 1e-15, 0);
    assert_close(m.recall, 1.0, 1e-15, 0);
}

static void test_classify_threshold_is_inclusive(void **state)
{
    (void)state;
    classify_measures m = measure_ok(spec_y, spec_p, 6, 0.7);
    /* p >= .7: .9 yes, .8 yes, .7 no (exactly at the threshold counts as
     * predicted yes); p < .7: .6 yes (fn), .55 no, .4 no */
    assert_int_equal(m.tp, 2);
    assert_int_equal(m.fp, 1);
    assert_int_equal(m.tn, 2);
    assert_int_equal(m.fn, 1);
    assert_close(m.accuracy, 4.0 / 6, 1e-15, 0);
    assert_close(m.precision, 2.0 / 3, 1e-15, 0);
    assert_close(m.recall, 2.0 / 3, 1e-15, 0);
    /* threshold-free measures do not move */
    assert_close(m.auc, 8.0 / 9.0, 1e-15, 0);
}

static void test_classify_precision_undefined_without_predicted_yes(
    void **state)
{
    (void)state;
    classify_measures m = measure_ok(spec_y, spec_p, 6, 0.95);
    assert_int_equal(m.tp + m.fp, 0);
    assert_true(isnan(m.precision));
    assert_close(m.recall, 0.0, 0, 0);
    assert_close(m.accuracy, 3.0 / 6, 1e-15, 0);
}

static void test_classify_one_class_has_no_auc_or_recall(void **state)
{
    (void)state;
    const double y[] = {0, 0, 0, 0, 0};
    const double p[] = {.12, .31, .57, .08, .44};
    classify_measures m = measure_ok(y, p, N(y), 0.5);
    assert_true(isnan(m.auc));
    assert_true(isnan(m.recall));        /* no positives */
    assert_close(m.precision, 0.0, 0, 0); /* .57 predicted yes, wrongly */
    assert_int_equal(m.fp, 1);
    assert_close(m.accuracy, 4.0 / 5, 1e-15, 0);
    double brier = (.12 * .12 + .31 * .31 + .57 * .57 + .08 * .08
                    + .44 * .44) / 5;
    assert_close(m.brier, brier, 1e-14, 0);

    const double y1[] = {1, 1, 1};
    const double p1[] = {.72, .33, .91};
    m = measure_ok(y1, p1, N(y1), 0.5);
    assert_true(isnan(m.auc));
    assert_close(m.recall, 2.0 / 3, 1e-15, 0);
}

static void test_classify_all_p_equal(void **state)
{
    (void)state;
    const double y[] = {1, 0, 0, 1, 0, 1, 1, 0, 0, 0, 1, 0};
    double p[N(y)];
    for (size_t i = 0; i < N(y); i++)
        p[i] = 0.4137;
    classify_measures m = measure_ok(y, p, N(y), 0.5);
    assert_close(m.auc, 0.5, 1e-15, 0);    /* every pair a tie */
    assert_int_equal(m.hl_groups, 1);      /* one tie block, one group */
    assert_int_equal(m.hl_df, 0);
    assert_true(isnan(m.hl_stat));
    assert_true(isnan(m.hl_pvalue));
    assert_int_equal(m.tn + m.fn, N(y));
}

static void test_classify_auc_perfect_and_reversed(void **state)
{
    (void)state;
    const double y[] = {0, 1, 0, 1, 1, 0};
    const double p[] = {.21, .83, .35, .64, .97, .18};
    classify_measures m = measure_ok(y, p, N(y), 0.5);
    assert_close(m.auc, 1.0, 0, 0);
    double q[N(p)];
    for (size_t i = 0; i < N(p); i++)
        q[i] = 1 - p[i];
    m = measure_ok(y, q, N(y), 0.5);
    assert_close(m.auc, 0.0, 0, 0);
}

static void test_classify_auc_matches_pair_count_with_ties(void **state)
{
    (void)state;
    gsl_rng *r = gsl_rng_alloc(gsl_rng_mt19937);
    assert_non_null(r);
    const unsigned long seeds[] = {20240611UL, 7919UL, 104729UL, 31337UL};
    for (size_t s = 0; s < N(seeds); s++) {
        gsl_rng_set(r, seeds[s]);
        size_t n = 150 + gsl_rng_uniform_int(r, 200);
        double *y = malloc(n * sizeof *y), *p = malloc(n * sizeof *p);
        assert_non_null(y);
        assert_non_null(p);
        for (size_t i = 0; i < n; i++) {
            /* 13 distinct levels for most rows (many ties), a few rows
             * with a value of their own */
            p[i] = gsl_rng_uniform(r) < 0.8
                 ? 0.0371 + 0.0713 * (double)gsl_rng_uniform_int(r, 13)
                 : gsl_rng_uniform(r);
            /* more positives where p is higher, so the AUC is not 1/2 */
            y[i] = gsl_rng_uniform(r) < 0.2 + 0.6 * p[i] ? 1 : 0;
        }
        classify_measures m = measure_ok(y, p, n, 0.5);
        double expect = auc_pairs(y, p, n);
        assert_true(expect > 0.55 && expect < 0.95);
        assert_close(m.auc, expect, 1e-13, 0);
        free(y);
        free(p);
    }
    gsl_rng_free(r);
}

/* An O(n^2) count here would take ~10^10 steps: this checks the sort. */
static void test_classify_auc_large_sample_by_block_counts(void **state)
{
    (void)state;
    const size_t n = 300000;
    double *y = malloc(n * sizeof *y), *p = malloc(n * sizeof *p);
    assert_non_null(y);
    assert_non_null(p);
    /* three levels; row i has level i % 3 and is positive when i % 5 < k,
     * with k = 1, 2, 4 for the low, middle and high level */
    const double level[3] = {.173, .418, .796};
    const unsigned k[3] = {1, 2, 4};
    double pos[3] = {0}, neg[3] = {0};
    for (size_t i = 0; i < n; i++) {
        unsigned l = (unsigned)(i % 3);
        p[i] = level[l];
        y[i] = (i % 5) < k[l] ? 1 : 0;
        if (y[i] == 1)
            pos[l]++;
        else
            neg[l]++;
    }
    /* U = sum over levels of pos * (negatives at lower levels + half the
     * negatives at the same level) */
    double u = pos[0] * (neg[0] / 2) + pos[1] * (neg[0] + neg[1] / 2)
             + pos[2] * (neg[0] + neg[1] + neg[2] / 2);
    double n1 = pos[0] + pos[1] + pos[2], n0 = neg[0] + neg[1] + neg[2];
    classify_measures m = measure_ok(y, p, n, 0.5);
    assert_close(m.auc, u / (n1 * n0), 1e-13, 0);
    free(y);
    free(p);
}

static void test_classify_log_loss_clips_certain_mistakes(void **state)
{
    (void)state;
    const double y[] = {1, 0, 1, 0};
    const double p[] = {0, 1, 1, 0};  /* two certain and wrong, two right */
    classify_measures m = measure_ok(y, p, N(y), 0.5);
    /* clip at 1e-15: each wrong row costs -ln(1e-15); each right row
     * -ln(1 - 1e-15), about 1e-15 */
    double hand = (2 * -log(1e-15) + 2 * -log1p(-1e-15)) / 4;
    assert_true(isfinite(m.logloss));
    assert_close(m.logloss, hand, 1e-12, 0);
    assert_close(m.brier, 0.5, 0, 0);
}

static void test_classify_hl_four_tie_blocks_by_hand(void **state)
{
    (void)state;
    /* 20 rows, p in four blocks of five (.2, .4, .6, .8), given out of
     * order. Targets b_k = 2, 4, ..., 20: the first block ends at 5 >= 2,
     * the next group aims at 6, the second block ends at 10, then 12 ->
     * 15, 16 -> 20: four groups, one per block.
     * Observed positives 1, 3, 2, 4; expected 1, 2, 3, 4; so
     * C = 0 + 1/(5 .4 .6) + 1/(5 .6 .4) + 0 = 2/1.2 = 5/3 on 2 df. */
    const double p[] = {.6, .2, .8, .4, .2, .6, .8, .4, .2, .6,
                        .4, .8, .2, .6, .4, .8, .2, .8, .4, .6};
    const double y[] = {1, 0, 1, 1, 0, 0, 1, 1, 1, 1,
                        0, 1, 0, 0, 1, 0, 0, 1, 0, 0};
    classify_measures m = measure_ok(y, p, N(y), 0.5);
    assert_int_equal(m.hl_groups, 4);
    assert_int_equal(m.hl_df, 2);
    assert_close(m.hl_stat, 5.0 / 3.0, 1e-14, 0);
    /* The chi-squared density on 2 df is exp(-x/2)/2 (put k = 2 in
     * x^(k/2-1) exp(-x/2) / (2^(k/2) Gamma(k/2))), so Q(x) = exp(-x/2). */
    assert_close(m.hl_pvalue, exp(-5.0 / 6.0), 1e-12, 0);
}

static void test_classify_hl_keeps_tie_block_across_boundary(void **state)
{
    (void)state;
    /* Sorted, 20 rows; the block of three .12 spans ranks 2-4. Targets
     * b_k = 2, 4, ..., 20: after .05 the count is 1 < 2; the .12 block
     * brings it to 4 >= 2, closing group 1 (ranks 1-4) and aiming next at
     * 6 (4 is already reached); then groups close at 6, 8, ..., 20: the
     * groups are ranks 1-4, 5-6, 7-8, ..., 19-20, nine in all, 7 df. */
    const double ps[] = {.05, .12, .12, .12, .18, .22, .27, .31, .36, .40,
                         .45, .49, .53, .58, .62, .67, .71, .76, .83, .91};
    const double ys[] = {0, 0, 1, 0, 0, 0, 1, 0, 0, 1,
                         0, 1, 1, 0, 1, 1, 0, 1, 1, 1};
    double hand = hl_term(ys, ps, 0, 4);
    for (size_t from = 4; from < 20; from += 2)
        hand += hl_term(ys, ps, from, from + 2);

    /* give the rows in a scrambled order (i -> 7 i mod 20) */
    double p[20], y[20];
    for (size_t i = 0; i < 20; i++) {
        p[(7 * i) % 20] = ps[i];
        y[(7 * i) % 20] = ys[i];
    }
    classify_measures m = measure_ok(y, p, 20, 0.5);
    assert_int_equal(m.hl_groups, 9);
    assert_int_equal(m.hl_df, 7);
    assert_close(m.hl_stat, hand, 1e-13, 0);
    assert_true(m.hl_pvalue > 0 && m.hl_pvalue < 1);
}

static void test_classify_hl_merges_groups_at_zero_and_one(void **state)
{
    (void)state;
    /* five blocks of four: p = 0, .3, .5, .7, 1 -> five groups (targets
     * 2, 4, ...: each block closes one). The p = 0 group has no variance
     * and merges into the .3 group; the p = 1 group into the .7 group:
     *   {0 x4, .3 x4}: 8 rows, expected 1.2, observed 1, pbar .15
     *   {.5 x4}:       4 rows, expected 2,   observed 2
     *   {.7 x4, 1 x4}: 8 rows, expected 6.8, observed 7, pbar .85
     * C = .04/(8 .15 .85) + 0 + .04/(8 .85 .15) = .08/1.02 on 1 df. */
    const double p[] = {0, 0, 0, 0, .3, .3, .3, .3, .5, .5,
                        .5, .5, .7, .7, .7, .7, 1, 1, 1, 1};
    const double y[] = {0, 0, 0, 0, 1, 0, 0, 0, 1, 1,
                        0, 0, 1, 1, 1, 0, 1, 1, 1, 1};
    classify_measures m = measure_ok(y, p, N(y), 0.5);
    assert_int_equal(m.hl_groups, 3);
    assert_int_equal(m.hl_df, 1);
    assert_close(m.hl_stat, 0.08 / 1.02, 1e-13, 0);
    assert_true(isfinite(m.hl_pvalue));
}

static void test_classify_hl_two_groups_left_is_undefined(void **state)
{
    (void)state;
    /* blocks 0 x5, .4 x5, .6 x5, 1 x5: the 0 group merges up, the 1
     * group down, leaving two groups: no statistic on g - 2 = 0 df */
    double p[20], y[20];
    const double level[4] = {0, .4, .6, 1};
    for (size_t i = 0; i < 20; i++) {
        p[i] = level[i / 5];
        y[i] = (i % 5) < 2 * (i / 5) ? 1 : 0;
    }
    classify_measures m = measure_ok(y, p, 20, 0.5);
    assert_int_equal(m.hl_groups, 2);
    assert_int_equal(m.hl_df, 0);
    assert_true(isnan(m.hl_stat));
    assert_true(isnan(m.hl_pvalue));
}

static void test_classify_hl_fewer_than_ten_rows(void **state)
{
    (void)state;
    /* n = 6 distinct p: targets floor(.6 k) = 0, 1, 1, 2, 3, 3, 4, 4, 5, 6
     * close a group after every row: six groups of one, 4 df */
    classify_measures m = measure_ok(spec_y, spec_p, 6, 0.5);
    double hand = 0;
    for (size_t i = 0; i < 6; i++)
        hand += hl_term(spec_y, spec_p, i, i + 1);
    /* written out: .01/.09 + .04/.16 + .49/.21 + .16/.24 + .3025/.2475
     * + .16/.24 */
    assert_close(hand, .01 / .09 + .04 / .16 + .49 / .21 + .16 / .24
                       + .3025 / .2475 + .16 / .24, 1e-14, 0);
    assert_int_equal(m.hl_groups, 6);
    assert_int_equal(m.hl_df, 4);
    assert_close(m.hl_stat, hand, 1e-14, 0);

    /* two rows: two groups, undefined */
    m = measure_ok(spec_y, spec_p, 2, 0.5);
    assert_int_equal(m.hl_groups, 2);
    assert_true(isnan(m.hl_stat));
    /* one row */
    m = measure_ok(spec_y, spec_p, 1, 0.5);
    assert_int_equal(m.hl_groups, 1);
    assert_true(isnan(m.hl_pvalue));
    assert_true(isnan(m.auc));
}

/* y ~ Bernoulli(q(p)) for p uniform on (.02, .98), seeded. */
static void sample(gsl_rng *r, double *y, double *p, size_t n, int square)
{
    for (size_t i = 0; i < n; i++) {
        p[i] = 0.02 + 0.96 * gsl_rng_uniform(r);
        double q = square ? p[i] * p[i] : p[i];
        y[i] = gsl_rng_uniform(r) < q ? 1 : 0;
    }
}

static void test_classify_hl_calibrated_sample_fits(void **state)
{
    (void)state;
    enum { n = 5000 };
    double *y = malloc(n * sizeof *y), *p = malloc(n * sizeof *p);
    assert_non_null(y);
    assert_non_null(p);
    gsl_rng *r = gsl_rng_alloc(gsl_rng_mt19937);
    assert_non_null(r);
    gsl_rng_set(r, 424242UL);
    sample(r, y, p, n, 0);
    classify_measures m = measure_ok(y, p, n, 0.5);
    assert_int_equal(m.hl_groups, 10);
    assert_int_equal(m.hl_df, 8);
    assert_true(m.hl_pvalue > 0.01);  /* deterministic for this seed */

    /* the same p reported for outcomes drawn with probability p^2 are
     * badly calibrated: the test must be able to tell */
    gsl_rng_set(r, 424242UL);
    sample(r, y, p, n, 1);
    m = measure_ok(y, p, n, 0.5);
    assert_true(m.hl_pvalue < 1e-6);
    gsl_rng_free(r);
    free(y);
    free(p);
}

static void test_classify_rejects_bad_input(void **state)
{
    (void)state;
    const double y[] = {1, 0, 1};
    const double p[] = {.61, .27, .83};
    measure_fails(y, p, 0, 0.5, "at least one row");

    const double y2[] = {1, 2, 0};
    measure_fails(y2, p, 3, 0.5, "outcome 2 of 3 is 2, not 0 or 1");
    const double yn[] = {1, 0, NAN};
    measure_fails(yn, p, 3, 0.5, "outcome 3 of 3");
    const double yh[] = {0.5, 0, 1};
    measure_fails(yh, p, 3, 0.5, "not 0 or 1");

    const double pn[] = {.61, -0.01, .83};
    measure_fails(y, pn, 3, 0.5, "probability 2 of 3");
    const double pb[] = {.61, .27, 1.0001};
    measure_fails(y, pb, 3, 0.5, "not between 0 and 1");
    const double pnan[] = {NAN, .27, .83};
    measure_fails(y, pnan, 3, 0.5, "probability 1 of 3");

    measure_fails(y, p, 3, NAN, "threshold");
    measure_fails(y, p, 3, INFINITY, "threshold");
}

int main(void)
{
    gsl_set_error_handler_off();  /* as main() does: errors are returned */
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_classify_spec_case_auc_and_brier),
        cmocka_unit_test(test_classify_spec_case_log_loss_by_hand),
        cmocka_unit_test(test_classify_confusion_and_rates_at_half),
        cmocka_unit_test(test_classify_threshold_is_inclusive),
        cmocka_unit_test(
            test_classify_precision_undefined_without_predicted_yes),
        cmocka_unit_test(test_classify_one_class_has_no_auc_or_recall),
        cmocka_unit_test(test_classify_all_p_equal),
        cmocka_unit_test(test_classify_auc_perfect_and_reversed),
        cmocka_unit_test(test_classify_auc_matches_pair_count_with_ties),
        cmocka_unit_test(test_classify_auc_large_sample_by_block_counts),
        cmocka_unit_test(test_classify_log_loss_clips_certain_mistakes),
        cmocka_unit_test(test_classify_hl_four_tie_blocks_by_hand),
        cmocka_unit_test(test_classify_hl_keeps_tie_block_across_boundary),
        cmocka_unit_test(test_classify_hl_merges_groups_at_zero_and_one),
        cmocka_unit_test(test_classify_hl_two_groups_left_is_undefined),
        cmocka_unit_test(test_classify_hl_fewer_than_ten_rows),
        cmocka_unit_test(test_classify_hl_calibrated_sample_fits),
        cmocka_unit_test(test_classify_rejects_bad_input),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
