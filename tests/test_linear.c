/*
 * test_linear.c: ordinary least squares (engine/linear.c) against answers
 * computed here by independent means: closed forms of simple regression,
 * normal equations solved by Gaussian elimination in long double, exact
 * polynomial data, and published t-table values. Also the rank rules
 * (zero, constant and collinear terms, dropped in job order) and every
 * input error of linear_fit.
 */
#include "testutil.h"

#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_errno.h>

#include "../engine/linear.h"

#define N(a) (sizeof(a) / sizeof((a)[0]))
#define PI 3.14159265358979323846

/* Fits or fails the test with the error's message. */
static linear_model *fit_ok(const long double *X, const long double *y,
                            size_t n, size_t p, int intercept, double level)
{
    linear_model *m = NULL;
    rf_error e = {0};
    rf_status s = linear_fit(X, y, n, p, intercept, level, &m, &e);
    if (s != RF_OK)
        fail_msg("linear_fit failed: %s", e.message);
    assert_non_null(m);
    return m;
}

/* Expects RF_EINPUT with fragment in the message and *out reset to NULL. */
static void fit_fails(const long double *X, const long double *y, size_t n,
                      size_t p, int intercept, const char *fragment)
{
    linear_model *m = (linear_model *)&m;  /* must be reset to NULL */
    rf_error e = {0};
    rf_status s = linear_fit(X, y, n, p, intercept, 0.95, &m, &e);
    assert_int_equal(s, RF_EINPUT);
    assert_int_equal(e.status, RF_EINPUT);
    assert_null(m);
    if (strstr(e.message, fragment) == NULL)
        fail_msg("message '%s' lacks '%s'", e.message, fragment);
}

/* Copies X (n x p) without column drop into out (n x (p-1)). */
static void drop_column(const long double *X, size_t n, size_t p, size_t drop,
                        long double *out)
{
    for (size_t i = 0; i < n; i++)
        for (size_t j = 0, c = 0; j < p; j++)
            if (j != drop)
                out[i * (p - 1) + c++] = X[i * p + j];
}

/* X'X (p x p) of X (n x p). */
static void normal_matrix(const long double *X, size_t n, size_t p,
                          long double *A)
{
    for (size_t a = 0; a < p; a++)
        for (size_t b = 0; b < p; b++) {
            long double s = 0;
            for (size_t i = 0; i < n; i++)
                s += X[i * p + a] * X[i * p + b];
            A[a * p + b] = s;
        }
}

/* A small well-conditioned design used by several tests: intercept and two
 * inputs with no simple relation, 11 rows (8 residual degrees of freedom).
 * Invented values, high-entropy as the style guide asks. */
#define W_N 11
#define W_P 3
static const double w_x1[W_N] = { 2.385, 3.71, 1.094, 5.263, 4.418,
                                  6.027, 2.951, 7.336, 3.182, 5.874, 4.067 };
static const double w_x2[W_N] = { 11.2, 9.47, 14.05, 8.31, 12.66,
                                  10.9, 15.38, 9.02, 13.71, 7.64, 11.83 };
static const double w_y[W_N] = { 31.4, 33.9, 28.7, 41.2, 40.5,
                                 46.8, 36.1, 50.3, 37.6, 43.9, 39.2 };

static void well_design(long double *X, long double *y)
{
    for (size_t i = 0; i < W_N; i++) {
        X[i * W_P + 0] = 1;
        X[i * W_P + 1] = w_x1[i];
        X[i * W_P + 2] = w_x2[i];
        y[i] = w_y[i];
    }
}

/* ---------------------------------------------------------- exact fits */

static void test_linear_exact_line_gives_exact_beta(void **state)
{
    (void)state;
    /* y = 2.375 + 3.125 x with dyadic x: every value is exact in binary,
     * so the fit must be exact and the residuals zero. */
    const double xs[] = { 1.5, 2.25, 3.125, 4.75, 6.5, 7.0625 };
    long double X[2 * N(xs)], y[N(xs)];
    for (size_t i = 0; i < N(xs); i++) {
        X[2 * i] = 1;
        X[2 * i + 1] = xs[i];
        y[i] = 2.375L + 3.125L * xs[i];
    }
    linear_model *m = fit_ok(X, y, N(xs), 2, 1, 0.95);
    assert_int_equal(m->n, N(xs));
    assert_int_equal(m->p, 2);
    assert_int_equal(m->rank, 2);
    assert_int_equal(m->drop[0], LINEAR_KEPT);
    assert_int_equal(m->drop[1], LINEAR_KEPT);
    assert_close(m->beta[0], 2.375, 1e-15, 0);
    assert_close(m->beta[1], 3.125, 1e-15, 0);
    /* rounding-level residuals count as an exact fit: rss exactly 0, so
     * no t of 1e46 from noise */
    assert_true(m->rss == 0);
    assert_true(m->sigma == 0 && m->se[1] == 0);
    assert_true(isnan(m->t[1]) && isnan(m->pvalue[1]));
    assert_close(m->r2, 1, 1e-15, 0);
    for (size_t i = 0; i < N(xs); i++)
        assert_close(m->residual[i], 0, 0, 1e-12);
    /* no residual variance: an infinite F, whose p value is undefined */
    assert_true(isinf(m->fstat) && m->fstat > 0);
    assert_true(isnan(m->fpvalue));
    assert_true(isinf(m->aic) && m->aic < 0);
    assert_true(m->refine_converged);
    linear_free(m);
}

static void test_linear_four_point_line_matches_closed_form(void **state)
{
    (void)state;
    /* Closed-form simple regression, Montgomery, Peck & Vining,
     * Introduction to Linear Regression Analysis, ch. 2:
     * b1 = Sxy / Sxx, b0 = ybar - b1 xbar, s^2 = RSS / (n - 2),
     * se(b1) = s / sqrt(Sxx), se(b0) = s sqrt(1/n + xbar^2 / Sxx). */
    const double xs[] = { 1.2, 2.385, 3.7, 5.05 };
    const double ys[] = { 3.1, 4.93, 8.2, 9.61 };
    size_t n = N(xs);
    long double X[2 * N(xs)], y[N(xs)];
    long double sx = 0, sy = 0;
    for (size_t i = 0; i < n; i++) {
        X[2 * i] = 1;
        X[2 * i + 1] = xs[i];
        y[i] = ys[i];
        sx += xs[i];
        sy += ys[i];
    }
    long double xbar = sx / n, ybar = sy / n, sxx = 0, sxy = 0, syy = 0;
    for (size_t i = 0; i < n; i++) {
        sxx += (xs[i] - xbar) * (xs[i] - xbar);
        sxy += (xs[i] - xbar) * (ys[i] - ybar);
        syy += (ys[i] - ybar) * (ys[i] - ybar);
    }
    long double b1 = sxy / sxx, b0 = ybar - b1 * xbar;
    long double rss = 0, sae = 0;
    for (size_t i = 0; i < n; i++) {
        long double e = ys[i] - b0 - b1 * xs[i];
        rss += e * e;
        sae += fabsl(e);
    }
    long double s2 = rss / (n - 2);
    long double se1 = sqrtl(s2 / sxx);
    long double se0 = sqrtl(s2 * (1.0L / n + xbar * xbar / sxx));

    linear_model *m = fit_ok(X, y, n, 2, 1, 0.95);
    assert_close(m->beta[0], (double)b0, 1e-13, 0);
    assert_close(m->beta[1], (double)b1, 1e-13, 0);
    assert_close(m->se[0], (double)se0, 1e-12, 0);
    assert_close(m->se[1], (double)se1, 1e-12, 0);
    assert_close(m->rss, (double)rss, 1e-12, 0);
    assert_close(m->tss, (double)syy, 1e-14, 0);
    assert_close(m->r2, (double)(1 - rss / syy), 1e-13, 0);
    assert_close(m->adj_r2, (double)(1 - (rss / (n - 2)) / (syy / (n - 1))),
                 1e-13, 0);
    assert_close(m->sigma, (double)sqrtl(s2), 1e-13, 0);
    assert_close(m->rmse, (double)sqrtl(rss / n), 1e-13, 0);
    assert_close(m->mae, (double)(sae / n), 1e-12, 0);
    assert_close(m->df_resid, 2, 0, 0);
    assert_close(m->df_model, 1, 0, 0);
    for (size_t i = 0; i < n; i++)
        assert_close(m->residual[i], (double)(ys[i] - b0 - b1 * xs[i]),
                     1e-10, 1e-13);
    for (size_t j = 0; j < 2; j++)
        assert_close(m->t[j], m->beta[j] / m->se[j], 1e-15, 0);

    /* t with 2 degrees of freedom has a closed form: the two-sided tail
     * of |t| is 1 - |t| / sqrt(2 + t^2) (Abramowitz & Stegun, Handbook of
     * Mathematical Functions, 26.7.4 with nu = 2, A(t|2) = t/sqrt(2+t^2);
     * equation number from memory, the form follows by integrating the
     * nu = 2 density (1/2)(1 + t^2/2)^(-3/2)). */
    for (size_t j = 0; j < 2; j++) {
        double t = m->t[j];
        assert_close(m->pvalue[j], 1 - fabs(t) / sqrt(2 + t * t), 1e-9, 1e-15);
    }
    /* t(0.975, 2) = 4.303 (NIST/SEMATECH e-Handbook of Statistical
     * Methods, table 1.3.6.7.2) */
    assert_close(m->tcrit, 4.303, 0, 5e-4);
    for (size_t j = 0; j < 2; j++) {
        assert_close(m->low[j], m->beta[j] - m->tcrit * m->se[j], 1e-14, 0);
        assert_close(m->high[j], m->beta[j] + m->tcrit * m->se[j], 1e-14, 0);
    }
    /* With one regressor F = t^2 of the slope and both test the same
     * hypothesis, so their p values agree (Montgomery, Peck & Vining,
     * ch. 2, the analysis-of-variance approach). */
    assert_close(m->fstat, m->t[1] * m->t[1], 1e-12, 0);
    assert_close(m->fpvalue, m->pvalue[1], 1e-9, 1e-15);
    linear_free(m);
}

/* ------------------------------------------------------- dropped terms */

static void test_linear_duplicated_column_drops_later_term(void **state)
{
    (void)state;
    long double X[W_N * 4], y[W_N], Xr[W_N * 3];
    for (size_t i = 0; i < W_N; i++) {
        X[i * 4 + 0] = 1;
        X[i * 4 + 1] = w_x1[i];
        /* twice x1: the larger norm makes plain pivoting choose it first,
         * so only the job-order rule keeps x1 */
        X[i * 4 + 2] = 2 * (long double)w_x1[i];
        X[i * 4 + 3] = w_x2[i];
        y[i] = w_y[i];
    }
    linear_model *m = fit_ok(X, y, W_N, 4, 1, 0.95);
    assert_int_equal(m->rank, 3);
    assert_int_equal(m->drop[0], LINEAR_KEPT);
    assert_int_equal(m->drop[1], LINEAR_KEPT);
    assert_int_equal(m->drop[2], LINEAR_DROP_COLLINEAR);
    assert_int_equal(m->drop[3], LINEAR_KEPT);
    assert_int_equal(m->n_with[2], 1);
    assert_int_equal(m->with[2 * LINEAR_WITH_MAX + 0], 1);
    assert_true(isnan(m->beta[2]));
    assert_true(isnan(m->se[2]));
    assert_true(isnan(m->pvalue[2]));
    assert_close(m->df_resid, W_N - 3, 0, 0);
    assert_close(m->df_model, 2, 0, 0);

    drop_column(X, W_N, 4, 2, Xr);
    linear_model *r = fit_ok(Xr, y, W_N, 3, 1, 0.95);
    const size_t map[] = { 0, 1, 3 };
    for (size_t k = 0; k < 3; k++) {
        assert_close(m->beta[map[k]], r->beta[k], 1e-12, 0);
        assert_close(m->se[map[k]], r->se[k], 1e-12, 0);
        assert_close(m->pvalue[map[k]], r->pvalue[k], 1e-10, 1e-15);
    }
    assert_close(m->rss, r->rss, 1e-12, 0);
    assert_close(m->r2, r->r2, 1e-13, 0);
    assert_close(m->fstat, r->fstat, 1e-12, 0);
    assert_close(m->aic, r->aic, 1e-13, 0);

    /* predictions ignore the dropped term and match the reduced model */
    double e1, l1, h1, e2, l2, h2;
    long double row[4] = { 1, 4.125L, 8.25L, 10.5L };
    long double rowr[3] = { 1, 4.125L, 10.5L };
    linear_predict(m, row, &e1, &l1, &h1);
    linear_predict(r, rowr, &e2, &l2, &h2);
    assert_close(e1, e2, 1e-13, 0);
    assert_close(l1, l2, 1e-12, 0);
    assert_close(h1, h2, 1e-12, 0);
    linear_free(m);
    linear_free(r);
}

static void test_linear_constant_column_dropped_with_intercept(void **state)
{
    (void)state;
    long double X[W_N * 4], y[W_N];
    for (size_t i = 0; i < W_N; i++) {
        X[i * 4 + 0] = 1;
        X[i * 4 + 1] = w_x1[i];
        X[i * 4 + 2] = 2.385L;  /* the same in every row */
        X[i * 4 + 3] = w_x2[i];
        y[i] = w_y[i];
    }
    linear_model *m = fit_ok(X, y, W_N, 4, 1, 0.95);
    assert_int_equal(m->drop[2], LINEAR_DROP_CONSTANT);
    assert_int_equal(m->drop[0], LINEAR_KEPT);
    assert_int_equal(m->drop[1], LINEAR_KEPT);
    assert_int_equal(m->drop[3], LINEAR_KEPT);
    assert_int_equal(m->rank, 3);
    assert_true(isnan(m->beta[2]));

    long double Xr[W_N * 3];
    drop_column(X, W_N, 4, 2, Xr);
    linear_model *r = fit_ok(Xr, y, W_N, 3, 1, 0.95);
    assert_close(m->beta[3], r->beta[2], 1e-12, 0);
    assert_close(m->rss, r->rss, 1e-12, 0);
    linear_free(m);
    linear_free(r);
}

static void test_linear_zero_column_dropped(void **state)
{
    (void)state;
    long double X[W_N * 4], y[W_N];
    for (int icpt = 0; icpt < 2; icpt++) {
        for (size_t i = 0; i < W_N; i++) {
            X[i * 4 + 0] = 1;
            X[i * 4 + 1] = w_x1[i];
            X[i * 4 + 2] = 0;
            X[i * 4 + 3] = w_x2[i];
            y[i] = w_y[i];
        }
        linear_model *m = fit_ok(X, y, W_N, 4, icpt, 0.95);
        assert_int_equal(m->drop[2], LINEAR_DROP_ZERO);
        assert_int_equal(m->drop[0], LINEAR_KEPT);
        assert_int_equal(m->rank, 3);
        assert_true(isnan(m->beta[2]));
        assert_false(isnan(m->beta[1]));
        linear_free(m);
    }
}

static void test_linear_constant_column_kept_without_intercept(void **state)
{
    (void)state;
    /* Without an intercept a constant column is the intercept in another
     * unit: it is kept, and c * beta_c equals the intercept of the same
     * fit with a column of ones. */
    const long double c = 2.385L;
    long double X[W_N * 3], Xone[W_N * 3], y[W_N];
    well_design(Xone, y);
    memcpy(X, Xone, sizeof X);
    for (size_t i = 0; i < W_N; i++)
        X[i * 3] = c;
    linear_model *m = fit_ok(X, y, W_N, 3, 0, 0.95);
    linear_model *r = fit_ok(Xone, y, W_N, 3, 1, 0.95);
    assert_int_equal(m->drop[0], LINEAR_KEPT);
    assert_int_equal(m->rank, 3);
    assert_close(m->beta[0] * (double)c, r->beta[0], 1e-12, 0);
    assert_close(m->beta[1], r->beta[1], 1e-12, 0);
    assert_close(m->beta[2], r->beta[2], 1e-12, 0);
    assert_close(m->rss, r->rss, 1e-12, 0);
    linear_free(m);
    linear_free(r);
}

static void test_linear_three_way_collinearity_names_both(void **state)
{
    (void)state;
    long double X[W_N * 4], y[W_N];
    for (size_t i = 0; i < W_N; i++) {
        X[i * 4 + 0] = 1;
        X[i * 4 + 1] = w_x1[i];
        X[i * 4 + 2] = w_x2[i];
        X[i * 4 + 3] = (long double)w_x1[i] + w_x2[i];
        y[i] = w_y[i];
    }
    linear_model *m = fit_ok(X, y, W_N, 4, 1, 0.95);
    assert_int_equal(m->rank, 3);
    assert_int_equal(m->drop[1], LINEAR_KEPT);
    assert_int_equal(m->drop[2], LINEAR_KEPT);
    assert_int_equal(m->drop[3], LINEAR_DROP_COLLINEAR);
    assert_int_equal(m->n_with[3], 2);
    size_t a = m->with[3 * LINEAR_WITH_MAX], b = m->with[3 * LINEAR_WITH_MAX + 1];
    assert_true((a == 1 && b == 2) || (a == 2 && b == 1));
    for (size_t j = 0; j < 3; j++)
        assert_int_equal(m->n_with[j], 0);
    linear_free(m);
}

static void test_linear_full_set_of_indicators_drops_the_last(void **state)
{
    (void)state;
    /* Indicators of every level of a category beside the intercept sum to
     * the intercept: the last one is dropped and explained by the
     * intercept and the other indicator. */
    long double X[W_N * 4], y[W_N];
    for (size_t i = 0; i < W_N; i++) {
        int a = i % 3 != 0;
        X[i * 4 + 0] = 1;
        X[i * 4 + 1] = w_x1[i];
        X[i * 4 + 2] = a;
        X[i * 4 + 3] = !a;
        y[i] = w_y[i];
    }
    linear_model *m = fit_ok(X, y, W_N, 4, 1, 0.95);
    assert_int_equal(m->rank, 3);
    assert_int_equal(m->drop[0], LINEAR_KEPT);
    assert_int_equal(m->drop[2], LINEAR_KEPT);
    assert_int_equal(m->drop[3], LINEAR_DROP_COLLINEAR);
    assert_int_equal(m->n_with[3], 2);
    size_t a = m->with[3 * LINEAR_WITH_MAX], b = m->with[3 * LINEAR_WITH_MAX + 1];
    assert_true((a == 0 && b == 2) || (a == 2 && b == 0));
    linear_free(m);
}

/* --------------------------------------------------------------- errors */

static void test_linear_rejects_too_few_rows(void **state)
{
    (void)state;
    long double X[W_N * W_P], y[W_N];
    well_design(X, y);
    fit_fails(X, y, 3, 3, 1, "only 3 usable rows for 3 terms");
    /* n = p + 1 is the least that fits: the first 4 rows */
    long double X4[4 * 3], y4[4];
    memcpy(X4, X, sizeof X4);
    memcpy(y4, y, sizeof y4);
    linear_model *m = fit_ok(X4, y4, 4, 3, 1, 0.95);
    assert_close(m->df_resid, 1, 0, 0);
    linear_free(m);
}

static void test_linear_rejects_non_finite(void **state)
{
    (void)state;
    long double X[W_N * W_P], y[W_N];
    well_design(X, y);
    X[4 * W_P + 2] = NAN;
    fit_fails(X, y, W_N, W_P, 1, "row 5 has a non-finite input");
    well_design(X, y);
    X[1] = INFINITY;
    fit_fails(X, y, W_N, W_P, 1, "row 1 has a non-finite input");
    well_design(X, y);
    y[7] = -INFINITY;
    fit_fails(X, y, W_N, W_P, 1, "row 8 has a non-finite target");
}

static void test_linear_rejects_no_terms(void **state)
{
    (void)state;
    long double X[1] = { 0 }, y[W_N] = { 0 };
    for (size_t i = 0; i < W_N; i++)
        y[i] = w_y[i];
    fit_fails(X, y, W_N, 0, 1, "no terms");
}

static void test_linear_rejects_too_many_terms(void **state)
{
    (void)state;
    /* the limit is checked before X is read */
    long double X[1] = { 0 }, y[1] = { 0 };
    fit_fails(X, y, 1, LINEAR_RANK_MAX + 1, 1, "at most 512");
}

static void test_linear_rejects_all_terms_zero_or_constant(void **state)
{
    (void)state;
    long double X[W_N * 2], y[W_N];
    for (size_t i = 0; i < W_N; i++) {
        X[i * 2] = 0;
        X[i * 2 + 1] = 0;
        y[i] = w_y[i];
    }
    fit_fails(X, y, W_N, 2, 0, "every term is zero or constant");
}

/* ------------------------------------------------------------ measures */

static void test_linear_no_intercept_uses_uncentred_r2(void **state)
{
    (void)state;
    /* Regression through the origin: b = sum(xy) / sum(x^2); R squared is
     * uncentred, 1 - RSS / sum(y^2), with 1 regression degree of freedom
     * (the NIST StRD convention for NoInt1/NoInt2, tests/nist/README.md). */
    long double X[W_N], y[W_N], sxy = 0, sxx = 0, syy = 0;
    for (size_t i = 0; i < W_N; i++) {
        X[i] = w_x1[i];
        y[i] = w_y[i];
        sxy += X[i] * y[i];
        sxx += X[i] * X[i];
        syy += y[i] * y[i];
    }
    long double b = sxy / sxx, rss = 0;
    for (size_t i = 0; i < W_N; i++)
        rss += (y[i] - b * X[i]) * (y[i] - b * X[i]);
    linear_model *m = fit_ok(X, y, W_N, 1, 0, 0.95);
    assert_int_equal(m->intercept, 0);
    assert_close(m->beta[0], (double)b, 1e-14, 0);
    assert_close(m->se[0], (double)sqrtl(rss / (W_N - 1) / sxx), 1e-12, 0);
    assert_close(m->rss, (double)rss, 1e-12, 0);
    assert_close(m->tss, (double)syy, 1e-14, 0);
    assert_close(m->r2, (double)(1 - rss / syy), 1e-13, 0);
    assert_close(m->adj_r2, (double)(1 - (rss / (W_N - 1)) / (syy / W_N)),
                 1e-13, 0);
    assert_close(m->df_model, 1, 0, 0);
    assert_close(m->df_resid, W_N - 1, 0, 0);
    assert_close(m->fstat, (double)((syy - rss) / (rss / (W_N - 1))), 1e-12, 0);
    linear_free(m);
}

static void test_linear_prediction_interval_uses_leverage(void **state)
{
    (void)state;
    long double X[W_N * W_P], y[W_N];
    well_design(X, y);
    linear_model *m = fit_ok(X, y, W_N, W_P, 1, 0.95);

    /* beta from the normal equations X'X b = X'y (3x3, well conditioned) */
    long double A[W_P * W_P], b[W_P];
    normal_matrix(X, W_N, W_P, A);
    for (size_t a = 0; a < W_P; a++) {
        b[a] = 0;
        for (size_t i = 0; i < W_N; i++)
            b[a] += X[i * W_P + a] * y[i];
    }
    tu_gauss_solve(A, b, W_P);
    for (size_t j = 0; j < W_P; j++)
        assert_close(m->beta[j], (double)b[j], 1e-11, 0);

    /* t(0.975, 8) = 2.306 (NIST/SEMATECH e-Handbook of Statistical
     * Methods, table 1.3.6.7.2), to 4 digits */
    assert_close(m->tcrit, 2.306, 0, 5e-4);
    double s = m->sigma;

    for (size_t i = 0; i < W_N; i += 3) {
        const long double *xi = X + i * W_P;
        /* leverage h = x' (X'X)^-1 x */
        long double z[W_P];
        memcpy(z, xi, sizeof z);
        normal_matrix(X, W_N, W_P, A);
        tu_gauss_solve(A, z, W_P);
        long double h = 0;
        for (size_t a = 0; a < W_P; a++)
            h += xi[a] * z[a];
        assert_true(h > 0 && h < 1);

        double est, low, high;
        linear_predict(m, xi, &est, &low, &high);
        long double fitted = 0;
        for (size_t a = 0; a < W_P; a++)
            fitted += xi[a] * b[a];
        assert_close(est, (double)fitted, 1e-12, 0);
        assert_close(est, (double)y[i] - m->residual[i], 1e-12, 0);
        double half = m->tcrit * s * sqrt(1 + (double)h);
        assert_close((high - low) / 2, half, 1e-10, 0);
        assert_close((high + low) / 2, est, 1e-13, 0);
    }

    /* the coefficient standard errors are s sqrt((X'X)^-1_jj) */
    for (size_t j = 0; j < W_P; j++) {
        long double e[W_P] = { 0 };
        e[j] = 1;
        normal_matrix(X, W_N, W_P, A);
        tu_gauss_solve(A, e, W_P);
        assert_close(m->se[j], s * sqrt((double)e[j]), 1e-10, 0);
    }
    linear_free(m);
}

static void test_linear_level_sets_interval_width(void **state)
{
    (void)state;
    long double X[W_N * W_P], y[W_N];
    well_design(X, y);
    linear_model *m = fit_ok(X, y, W_N, W_P, 1, 0.90);
    /* t(0.95, 8) = 1.860 (NIST/SEMATECH e-Handbook, table 1.3.6.7.2) */
    assert_close(m->level, 0.90, 0, 0);
    assert_close(m->tcrit, 1.860, 0, 5e-4);
    for (size_t j = 0; j < W_P; j++)
        assert_close(m->high[j] - m->low[j], 2 * m->tcrit * m->se[j], 1e-12, 0);
    linear_free(m);
}

static void test_linear_f_and_information_criteria(void **state)
{
    (void)state;
    long double X[W_N * W_P], y[W_N];
    well_design(X, y);
    linear_model *m = fit_ok(X, y, W_N, W_P, 1, 0.95);
    double n = W_N, k = W_P, rss = m->rss, tss = m->tss;

    long double ybar = 0, syy = 0;
    for (size_t i = 0; i < W_N; i++)
        ybar += y[i];
    ybar /= W_N;
    for (size_t i = 0; i < W_N; i++)
        syy += (y[i] - ybar) * (y[i] - ybar);
    assert_close(tss, (double)syy, 1e-14, 0);
    long double rss2 = 0;
    for (size_t i = 0; i < W_N; i++)
        rss2 += (long double)m->residual[i] * m->residual[i];
    assert_close(rss, (double)rss2, 1e-12, 0);

    double dfm = k - 1, dfr = n - k;
    double f = ((tss - rss) / dfm) / (rss / dfr);
    assert_close(m->fstat, f, 1e-12, 0);
    /* With 2 numerator degrees of freedom the F tail is closed-form:
     * F(2, d) relates to the incomplete beta I_x(1, d/2) with
     * x = 2f / (2f + d) (Abramowitz & Stegun 26.6.2, number from memory),
     * and I_x(1, b) = 1 - (1 - x)^b by direct integration, so
     * Q = (d / (d + 2f))^(d/2). */
    assert_close(m->fpvalue, pow(dfr / (dfr + 2 * f), dfr / 2), 1e-9, 1e-300);

    /* Gaussian log-likelihood at the ML variance RSS/n, the variance
     * counted as a parameter (Akaike 1974; Schwarz 1978). */
    double ll = -0.5 * n * (log(2 * PI * rss / n) + 1);
    assert_close(m->loglik, ll, 1e-13, 0);
    assert_close(m->aic, -2 * ll + 2 * (k + 1), 1e-13, 0);
    assert_close(m->bic, -2 * ll + (k + 1) * log(n), 1e-13, 0);
    assert_close(m->r2, 1 - rss / tss, 1e-14, 0);
    assert_close(m->adj_r2, 1 - (rss / dfr) / (tss / (n - 1)), 1e-14, 0);

    for (size_t j = 0; j < W_P; j++)
        assert_true(m->pvalue[j] >= 0 && m->pvalue[j] <= 1);
    assert_true(m->fpvalue >= 0 && m->fpvalue <= 1);
    assert_true(m->cond >= 1 && isfinite(m->cond));
    assert_true(m->refine_converged);
    assert_true(m->refine_steps >= 1);
    assert_close(m->rank_tol, LINEAR_RANK_TOL, 0, 0);
    linear_free(m);
}

static void test_linear_constant_target_has_no_r2(void **state)
{
    (void)state;
    long double X[W_N * W_P], y[W_N];
    well_design(X, y);
    for (size_t i = 0; i < W_N; i++)
        y[i] = 2.385L;
    linear_model *m = fit_ok(X, y, W_N, W_P, 1, 0.95);
    assert_close(m->beta[0], 2.385, 1e-12, 0);
    assert_close(m->tss, 0, 0, 0);
    assert_true(isnan(m->r2));
    assert_true(isnan(m->fstat));
    assert_true(isnan(m->fpvalue));
    linear_free(m);
}

static void test_linear_scaling_a_column_scales_its_beta(void **state)
{
    (void)state;
    long double X[W_N * W_P], Xs[W_N * W_P], y[W_N];
    well_design(X, y);
    memcpy(Xs, X, sizeof X);
    for (size_t i = 0; i < W_N; i++)
        Xs[i * W_P + 1] *= 1e6L;
    linear_model *m = fit_ok(X, y, W_N, W_P, 1, 0.95);
    linear_model *s = fit_ok(Xs, y, W_N, W_P, 1, 0.95);
    assert_close(s->beta[1], m->beta[1] * 1e-6, 1e-13, 0);
    assert_close(s->se[1], m->se[1] * 1e-6, 1e-13, 0);
    assert_close(s->t[1], m->t[1], 1e-13, 0);
    for (size_t j = 0; j < W_P; j += 2) {
        assert_close(s->beta[j], m->beta[j], 1e-13, 0);
        assert_close(s->se[j], m->se[j], 1e-13, 0);
    }
    assert_close(s->rss, m->rss, 1e-13, 0);
    assert_close(s->r2, m->r2, 1e-13, 0);
    assert_close(s->fstat, m->fstat, 1e-13, 0);
    assert_close(s->aic, m->aic, 1e-13, 0);
    assert_int_equal(s->rank, m->rank);
    linear_free(m);
    linear_free(s);
}

static void test_linear_degree7_polynomial_is_accurate(void **state)
{
    (void)state;
    /* y = 1 + x + ... + x^7 at x = 1..20: every power and every sum is an
     * integer below 2^64, so X and y are exact in long double and the
     * true coefficients are all exactly 1. */
    enum { NP = 20, P = 8 };
    long double X[NP * P], y[NP];
    for (size_t i = 0; i < NP; i++) {
        long double x = (long double)(i + 1), v = 1, s = 0;
        for (size_t k = 0; k < P; k++) {
            X[i * P + k] = v;
            s += v;
            v *= x;
        }
        y[i] = s;
    }
    linear_model *m = fit_ok(X, y, NP, P, 1, 0.95);
    assert_int_equal(m->rank, P);
    for (size_t k = 0; k < P; k++) {
        assert_int_equal(m->drop[k], LINEAR_KEPT);
        assert_close(m->beta[k], 1.0, 1e-9, 0);
    }
    assert_int_equal(m->refine_converged, 1);
    assert_true(m->cond > 1e4);  /* a design that needs the refinement */
    linear_free(m);
}

/* linear_set_beta: the exact solution put back gives the same measures;
 * other coefficients give the residuals and RSS their definitions give,
 * and no standard errors or intervals (they belong to the exact fit). */
static void test_linear_set_beta_recomputes_measures(void **state)
{
    (void)state;
    long double X[W_N * W_P], y[W_N];
    well_design(X, y);
    linear_model *m = fit_ok(X, y, W_N, W_P, 1, 0.95);
    double beta[W_P], rss = m->rss, r2 = m->r2, aic = m->aic;
    memcpy(beta, m->beta, sizeof beta);
    linear_set_beta(m, X, y, beta);
    assert_close(m->rss, rss, 1e-15, 0);
    assert_close(m->r2, r2, 1e-15, 0);
    assert_close(m->aic, aic, 1e-15, 0);
    for (size_t j = 0; j < W_P; j++)
        assert_true(isnan(m->se[j]) && isnan(m->t[j]) && isnan(m->low[j]));
    double est, low, high;
    linear_predict(m, X, &est, &low, &high);
    assert_true(isnan(low) && isnan(high));

    /* moved coefficients: RSS and MAE by their definitions */
    beta[1] += 0.25;
    beta[0] -= 1;
    linear_set_beta(m, X, y, beta);
    long double s2 = 0, sa = 0;
    for (size_t i = 0; i < W_N; i++) {
        long double e = y[i];
        for (size_t j = 0; j < W_P; j++)
            e -= X[i * W_P + j] * (long double)beta[j];
        s2 += e * e;
        sa += fabsl(e);
        assert_close(m->residual[i], (double)e, 1e-14, 1e-13);
    }
    assert_true(m->rss > rss);
    assert_close(m->rss, (double)s2, 1e-14, 0);
    assert_close(m->mae, (double)(sa / W_N), 1e-14, 0);
    assert_close(m->rmse, sqrt((double)(s2 / W_N)), 1e-14, 0);
    linear_free(m);
}

/* ------------------------------------------------------ cross-validation */

/* Out-of-fold estimates the slow, obvious way: for each fold, fit the other
 * rows and predict the fold's (the definition that linear_cv's update must
 * reproduce). */
static void brute_cv(const long double *X, const long double *y, size_t n,
                     size_t p, int intercept, const size_t *fold, size_t k,
                     double *pred)
{
    long double *Xt = malloc(n * p * sizeof *Xt), *yt = malloc(n * sizeof *yt);
    assert_non_null(Xt);
    assert_non_null(yt);
    for (size_t f = 0; f < k; f++) {
        size_t nt = 0;
        for (size_t i = 0; i < n; i++)
            if (fold[i] != f) {
                memcpy(Xt + nt * p, X + i * p, p * sizeof *Xt);
                yt[nt++] = y[i];
            }
        linear_model *m = fit_ok(Xt, yt, nt, p, intercept, 0.95);
        for (size_t i = 0; i < n; i++)
            if (fold[i] == f) {
                long double e = 0;
                for (size_t j = 0; j < p; j++)
                    if (m->drop[j] == LINEAR_KEPT)
                        e += X[i * p + j] * m->beta[j];
                pred[i] = (double)e;
            }
        linear_free(m);
    }
    free(Xt);
    free(yt);
}

/* A design of 40 invented rows: intercept, two inputs and a 0/1 indicator
 * that is 1 only in rows 0, 1 and 2 (all in fold 0 below, so fold 0's
 * training rows cannot estimate it). */
#define CV_N 40
#define CV_P 4
static void cv_design(long double *X, long double *y)
{
    for (size_t i = 0; i < CV_N; i++) {
        long double a = sinl(1.7L * i + 0.3L) * 10 + i * 0.25L;
        long double b = cosl(0.9L * i * i + 1.1L) * 4;
        X[i * CV_P] = 1;
        X[i * CV_P + 1] = a;
        X[i * CV_P + 2] = b;
        X[i * CV_P + 3] = i < 3;
        y[i] = 12.5L + 1.75L * a - 0.6L * b + 3 * (i < 3)
               + sinl(7.3L * i) * 2.1L;   /* a deterministic "noise" */
    }
}

static void test_linear_cv_equals_refitting_each_fold(void **state)
{
    (void)state;
    long double X[CV_N * CV_P], y[CV_N];
    cv_design(X, y);
    linear_model *m = fit_ok(X, y, CV_N, CV_P, 1, 0.95);
    size_t fold[CV_N], refits = 0;
    double fast[CV_N], slow[CV_N];
    rf_error e = {0};
    /* 5 folds by i mod 5 except rows 0..2, which all go to fold 0 */
    for (size_t i = 0; i < CV_N; i++)
        fold[i] = i < 3 ? 0 : i % 5;
    assert_int_equal(linear_cv(m, X, y, fold, 5, fast, &refits, &e), RF_OK);
    brute_cv(X, y, CV_N, CV_P, 1, fold, 5, slow);
    for (size_t i = 0; i < CV_N; i++)
        assert_close(fast[i], slow[i], 1e-11, 1e-11);
    /* fold 0 lost the indicator: refitted, not updated */
    assert_int_equal(refits, 1);

    /* without the lost direction, every fold is an update */
    for (size_t i = 0; i < CV_N; i++)
        fold[i] = i % 4;
    assert_int_equal(linear_cv(m, X, y, fold, 4, fast, &refits, &e), RF_OK);
    brute_cv(X, y, CV_N, CV_P, 1, fold, 4, slow);
    for (size_t i = 0; i < CV_N; i++)
        assert_close(fast[i], slow[i], 1e-11, 1e-11);
    assert_int_equal(refits, 0);
    linear_free(m);
}

/* Leave-one-out: the held-out residual is e_i / (1 - h_ii), the PRESS
 * identity (Allen 1974), checked here against n refits to 10 digits. */
static void test_linear_cv_leave_one_out_is_press(void **state)
{
    (void)state;
    long double X[W_N * W_P], y[W_N];
    well_design(X, y);
    linear_model *m = fit_ok(X, y, W_N, W_P, 1, 0.95);
    size_t fold[W_N], refits = 0;
    double fast[W_N], slow[W_N];
    rf_error e = {0};
    for (size_t i = 0; i < W_N; i++)
        fold[i] = i;
    assert_int_equal(linear_cv(m, X, y, fold, W_N, fast, &refits, &e), RF_OK);
    brute_cv(X, y, W_N, W_P, 1, fold, W_N, slow);
    for (size_t i = 0; i < W_N; i++) {
        double h = linear_leverage(m, X + i * W_P);
        double press = m->residual[i] / (1 - h);
        assert_close((double)y[i] - fast[i], press, 1e-12, 1e-12);
        assert_close(fast[i], slow[i], 1e-10, 0);
    }
    /* the same rows in 3 folds without an intercept */
    linear_model *m0 = fit_ok(X, y, W_N, W_P, 0, 0.95);
    for (size_t i = 0; i < W_N; i++)
        fold[i] = (i * 7) % 3;
    assert_int_equal(linear_cv(m0, X, y, fold, 3, fast, &refits, &e), RF_OK);
    brute_cv(X, y, W_N, W_P, 0, fold, 3, slow);
    for (size_t i = 0; i < W_N; i++)
        assert_close(fast[i], slow[i], 1e-11, 1e-11);
    /* a term only one row has: that row's leverage is 1 and its update
     * would divide rounding noise by rounding noise; it is refitted, and
     * equals the refit without the term */
    {
        long double Xc[CV_N * CV_P], yc[CV_N];
        size_t fc[CV_N];
        double fa[CV_N], sl[CV_N];
        cv_design(Xc, yc);
        for (size_t i = 0; i < CV_N; i++) {
            Xc[i * CV_P + 3] = i == 7;
            fc[i] = i;
        }
        linear_model *mc = fit_ok(Xc, yc, CV_N, CV_P, 1, 0.95);
        assert_int_equal(linear_cv(mc, Xc, yc, fc, CV_N, fa, &refits, &e),
                         RF_OK);
        assert_int_equal(refits, 1);
        brute_cv(Xc, yc, CV_N, CV_P, 1, fc, CV_N, sl);
        for (size_t i = 0; i < CV_N; i++)
            assert_close(fa[i], sl[i], 1e-10, 1e-10);
        linear_free(mc);
    }
    /* folds out of range */
    fold[0] = 3;
    assert_int_equal(linear_cv(m0, X, y, fold, 3, fast, &refits, &e),
                     RF_EINPUT);
    assert_int_equal(linear_cv(m0, X, y, fold, 1, fast, &refits, &e),
                     RF_EINPUT);
    linear_free(m);
    linear_free(m0);
}

static void test_linear_free_accepts_null(void **state)
{
    (void)state;
    linear_free(NULL);
}

int main(void)
{
    gsl_set_error_handler_off();  /* as main() does: errors are returned */
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_linear_exact_line_gives_exact_beta),
        cmocka_unit_test(test_linear_four_point_line_matches_closed_form),
        cmocka_unit_test(test_linear_duplicated_column_drops_later_term),
        cmocka_unit_test(test_linear_constant_column_dropped_with_intercept),
        cmocka_unit_test(test_linear_zero_column_dropped),
        cmocka_unit_test(test_linear_constant_column_kept_without_intercept),
        cmocka_unit_test(test_linear_three_way_collinearity_names_both),
        cmocka_unit_test(test_linear_full_set_of_indicators_drops_the_last),
        cmocka_unit_test(test_linear_rejects_too_few_rows),
        cmocka_unit_test(test_linear_rejects_non_finite),
        cmocka_unit_test(test_linear_rejects_no_terms),
        cmocka_unit_test(test_linear_rejects_too_many_terms),
        cmocka_unit_test(test_linear_rejects_all_terms_zero_or_constant),
        cmocka_unit_test(test_linear_no_intercept_uses_uncentred_r2),
        cmocka_unit_test(test_linear_prediction_interval_uses_leverage),
        cmocka_unit_test(test_linear_level_sets_interval_width),
        cmocka_unit_test(test_linear_f_and_information_criteria),
        cmocka_unit_test(test_linear_constant_target_has_no_r2),
        cmocka_unit_test(test_linear_scaling_a_column_scales_its_beta),
        cmocka_unit_test(test_linear_degree7_polynomial_is_accurate),
        cmocka_unit_test(test_linear_set_beta_recomputes_measures),
        cmocka_unit_test(test_linear_cv_equals_refitting_each_fold),
        cmocka_unit_test(test_linear_cv_leave_one_out_is_press),
        cmocka_unit_test(test_linear_free_accepts_null),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
