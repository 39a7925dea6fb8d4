/*
 * test_logistic.c: logistic regression (engine/logistic.c) against
 * statsmodels' Logit (Debian package python3-statsmodels, used only as a
 * test oracle) on two datasets that statsmodels ships: Spector & Mazzeo's
 * grades (statsmodels.datasets.spector) and the 1996 American National
 * Election Study extract (statsmodels.datasets.anes96). The data and the
 * expected values are in ORACLE_DIR/{spector,anes96}{.csv,-expected.txt},
 * written by tests/oracle/logit_oracle.py (statsmodels version in the
 * files), so this test needs no Python. Also: the penalized score equation
 * solved by the ridge fit, checked here in long double; separation, complete
 * and quasi-complete, on constructed data; the rank rules shared with the
 * linear model; every input error of logistic_fit.
 */
#include "testutil.h"

#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_errno.h>

#include "../engine/logistic.h"

#define N(a) (sizeof(a) / sizeof((a)[0]))
#define MAXT 16

/* A dataset with an intercept column prepended, and statsmodels' values. */
typedef struct dataset {
    size_t n, p;          /* p counts the intercept */
    long double *X;
    double *y;
    double beta[MAXT], se[MAXT];
    double loglik, null_loglik;
} dataset;

static void dataset_free(dataset *d)
{
    free(d->X);
    free(d->y);
}

/* Reads ORACLE_DIR/NAME.csv (inputs, then the 0/1 target) and
 * NAME-expected.txt. */
static void dataset_read(const char *name, dataset *d)
{
    char path[256], line[4096];
    memset(d, 0, sizeof *d);
    snprintf(path, sizeof path, "%s/%s.csv", tu_oracle_dir(), name);
    FILE *f = fopen(path, "r");
    if (f == NULL)
        fail_msg("cannot open %s (run from the top folder)", path);
    size_t cap = 0, cols = 0;
    assert_non_null(fgets(line, sizeof line, f));
    for (char *c = line; *c; c++)
        cols += *c == ',';
    d->p = cols + 1;  /* inputs + intercept */
    while (fgets(line, sizeof line, f)) {
        if (d->n == cap) {
            cap = cap ? 2 * cap : 64;
            d->X = realloc(d->X, cap * d->p * sizeof *d->X);
            d->y = realloc(d->y, cap * sizeof *d->y);
            assert_non_null(d->X);
            assert_non_null(d->y);
        }
        char *s = line, *end;
        d->X[d->n * d->p] = 1;
        for (size_t j = 1; j < d->p; j++) {
            d->X[d->n * d->p + j] = strtod(s, &end);
            assert_true(end != s && *end == ',');
            s = end + 1;
        }
        d->y[d->n] = strtod(s, &end);
        assert_true(end != s);
        d->n++;
    }
    fclose(f);
    snprintf(path, sizeof path, "%s/%s-expected.txt", tu_oracle_dir(), name);
    f = fopen(path, "r");
    if (f == NULL)
        fail_msg("cannot open %s", path);
    size_t t = 0;
    while (fgets(line, sizeof line, f)) {
        char term[64];
        if (line[0] == '#')
            continue;
        if (sscanf(line, "loglik %lf", &d->loglik) == 1
            || sscanf(line, "null_loglik %lf", &d->null_loglik) == 1)
            continue;
        assert_true(t < MAXT);
        assert_int_equal(sscanf(line, "term %63s %lf %lf", term, &d->beta[t],
                                &d->se[t]), 3);
        t++;
    }
    fclose(f);
    assert_int_equal(t, d->p);
}

static logistic_model *fit_ok(const long double *X, const double *y,
                              size_t n, size_t p, int intercept, double ridge)
{
    logistic_model *m = NULL;
    rf_error e = {0};
    rf_status s = logistic_fit(X, y, n, p, intercept, 0.95, ridge, &m, &e);
    if (s != RF_OK)
        fail_msg("logistic_fit failed: %s", e.message);
    assert_non_null(m);
    return m;
}

static void fit_fails(const long double *X, const double *y, size_t n,
                      size_t p, double ridge, const char *fragment)
{
    logistic_model *m = (logistic_model *)&m;  /* must be reset to NULL */
    rf_error e = {0};
    rf_status s = logistic_fit(X, y, n, p, 1, 0.95, ridge, &m, &e);
    assert_int_equal(s, RF_EINPUT);
    assert_int_equal(e.status, RF_EINPUT);
    assert_null(m);
    if (strstr(e.message, fragment) == NULL)
        fail_msg("message '%s' lacks '%s'", e.message, fragment);
}

/* Log relative error, the number of agreeing significant digits (McCullough,
 * "Assessing the reliability of statistical software", Am. Stat. 52 (1998)
 * 358-366). */
static double lre(double got, double want)
{
    if (got == want)
        return 17;
    return -log10(fabs(got - want) / fabs(want));
}

/* Checks a dataset's fit and prints the smallest LRE of each quantity. */
static void check_against_oracle(const char *name, double min_beta,
                                 double min_se, double min_ll)
{
    dataset d;
    dataset_read(name, &d);
    logistic_model *m = fit_ok(d.X, d.y, d.n, d.p, 1, 0);
    assert_int_equal(m->converged, 1);
    assert_int_equal(m->separation, SEPARATION_NONE);
    assert_int_equal(m->rank, d.p);
    double lb = 17, ls = 17;
    for (size_t j = 0; j < d.p; j++) {
        lb = fmin(lb, lre(m->beta[j], d.beta[j]));
        ls = fmin(ls, lre(m->se[j], d.se[j]));
    }
    double ll = lre(m->loglik, d.loglik), l0 = lre(m->null_loglik, d.null_loglik);
    print_message("%s: LRE beta %.1f, se %.1f, loglik %.1f, null loglik %.1f "
                  "(%d iterations)\n", name, lb, ls, ll, l0, m->iterations);
    /* statsmodels' null log-likelihood is itself iterated to its default
     * tolerance (about 10 digits here), ours is the closed form: 9 asked */
    if (lb < min_beta || ls < min_se || ll < min_ll || l0 < 9)
        fail_msg("%s below the required digits", name);
    logistic_free(m);
    dataset_free(&d);
}

/* Contract: coefficients and standard errors to 7 digits, log-likelihood
 * to 9. Measured: 14+ digits on both datasets (both programs in double
 * precision); we ask for 12, 12 and 13 so rounding noise cannot fail it
 * while any real change in the method will. */
static void test_logistic_matches_statsmodels_on_spector(void **state)
{
    (void)state;
    check_against_oracle("spector", 12, 12, 13);
}

static void test_logistic_matches_statsmodels_on_anes96(void **state)
{
    (void)state;
    check_against_oracle("anes96", 12, 12, 13);
}

/* z, p value, interval, odds ratios and the fit measures from their
 * definitions (Hosmer, Lemeshow & Sturdivant, Applied Logistic Regression,
 * 3rd ed., sec. 1.3-1.4; Akaike 1974; Schwarz 1978; McFadden 1974), the
 * normal tail by erfc, independent of GSL. */
static void test_logistic_derived_measures_follow_definitions(void **state)
{
    (void)state;
    dataset d;
    dataset_read("spector", &d);
    logistic_model *m = fit_ok(d.X, d.y, d.n, d.p, 1, 0);
    const double z975 = 1.959963984540054;  /* normal quantile, from memory */
    for (size_t j = 0; j < d.p; j++) {
        double z = m->beta[j] / m->se[j];
        assert_close(m->z[j], z, 1e-14, 0);
        assert_close(m->pvalue[j], erfc(fabs(z) / sqrt(2)), 1e-10, 0);
        assert_close(m->low[j], m->beta[j] - z975 * m->se[j], 1e-12, 1e-14);
        assert_close(m->high[j], m->beta[j] + z975 * m->se[j], 1e-12, 1e-14);
        assert_close(m->odds[j], exp(m->beta[j]), 1e-14, 0);
        assert_close(m->odds_low[j], exp(m->low[j]), 1e-14, 0);
        assert_close(m->odds_high[j], exp(m->high[j]), 1e-14, 0);
    }
    /* 11 of the 32 students improved: the intercept-only log-likelihood */
    double ones = 0;
    for (size_t i = 0; i < d.n; i++)
        ones += d.y[i];
    assert_close(ones, 11, 0, 0);
    assert_close(m->null_loglik, 11 * log(11.0 / 32) + 21 * log(21.0 / 32),
                 1e-14, 0);
    assert_close(m->deviance, -2 * m->loglik, 1e-15, 0);
    assert_close(m->null_deviance, -2 * m->null_loglik, 1e-15, 0);
    assert_close(m->aic, -2 * m->loglik + 2 * 4, 1e-15, 0);
    assert_close(m->bic, -2 * m->loglik + 4 * log(32.0), 1e-15, 0);
    assert_close(m->mcfadden, 1 - m->loglik / m->null_loglik, 1e-15, 0);
    /* fitted probabilities and predictions agree with the coefficients */
    double ll = 0;
    for (size_t i = 0; i < d.n; i++) {
        double eta = 0;
        for (size_t j = 0; j < d.p; j++)
            eta += m->beta[j] * (double)d.X[i * d.p + j];
        double pr = 1 / (1 + exp(-eta));
        assert_close(m->prob[i], pr, 1e-12, 0);
        assert_close(logistic_predict(m, d.X + i * d.p), pr, 1e-12, 0);
        ll += d.y[i] ? log(pr) : log1p(-pr);
    }
    assert_close(m->loglik, ll, 1e-12, 0);
    logistic_free(m);
    dataset_free(&d);
}

/* The ridge fit solves the penalized score equations
 * X'(y - p) - ridge * s_j^2 b_j = 0 (no penalty on the intercept; s_j the
 * standard deviation of column j, divisor n), checked here in long double;
 * classical standard errors are NaN. */
static void check_ridge_score(const long double *X, const double *y, size_t n,
                              size_t p, double ridge, const logistic_model *m)
{
    for (size_t j = 0; j < p; j++) {
        long double g = 0, s = 0, ss = 0, scale = 0;
        for (size_t i = 0; i < n; i++) {
            long double eta = 0;
            for (size_t k = 0; k < p; k++)
                eta += m->beta[k] * X[i * p + k];
            long double pr = 1 / (1 + expl(-eta));
            g += X[i * p + j] * (y[i] - pr);
            scale += fabsl(X[i * p + j]);
            s += X[i * p + j];
        }
        for (size_t i = 0; i < n; i++)
            ss += (X[i * p + j] - s / n) * (X[i * p + j] - s / n);
        if (j > 0)
            g -= ridge * (ss / n) * m->beta[j];
        if (!(fabsl(g) <= 1e-9L * scale))
            fail_msg("score of term %zu is %Lg", j, g);
    }
}

static void test_logistic_ridge_solves_penalized_score(void **state)
{
    (void)state;
    dataset d;
    dataset_read("spector", &d);
    logistic_model *m = fit_ok(d.X, d.y, d.n, d.p, 1, 2.5);
    assert_int_equal(m->converged, 1);
    check_ridge_score(d.X, d.y, d.n, d.p, 2.5, m);
    logistic_model *m0 = fit_ok(d.X, d.y, d.n, d.p, 1, 0);
    for (size_t j = 0; j < d.p; j++) {
        assert_true(isnan(m->se[j]) && isnan(m->z[j]) && isnan(m->pvalue[j]));
        assert_true(isnan(m->low[j]) && isnan(m->odds_low[j]));
        assert_close(m->odds[j], exp(m->beta[j]), 1e-14, 0);
        if (j > 0)  /* shrunk toward 0 */
            assert_true(fabs(m->beta[j]) < fabs(m0->beta[j]));
    }
    assert_true(m->loglik < m0->loglik);
    logistic_free(m0);
    logistic_free(m);
    dataset_free(&d);
}

/* The penalty is on standardized inputs: GPA in tenths of a point gives a
 * coefficient a tenth as large, the rest unchanged. */
static void test_logistic_ridge_does_not_depend_on_units(void **state)
{
    (void)state;
    dataset d;
    dataset_read("spector", &d);
    logistic_model *a = fit_ok(d.X, d.y, d.n, d.p, 1, 1.5);
    for (size_t i = 0; i < d.n; i++)
        d.X[i * d.p + 1] *= 10;
    logistic_model *b = fit_ok(d.X, d.y, d.n, d.p, 1, 1.5);
    assert_close(b->beta[1], a->beta[1] / 10, 1e-10, 0);
    for (size_t j = 0; j < d.p; j++)
        if (j != 1)
            assert_close(b->beta[j], a->beta[j], 1e-10, 0);
    logistic_free(a);
    logistic_free(b);
    dataset_free(&d);
}

/* x separates the classes completely (Albert & Anderson, Biometrika 71
 * (1984) 1-10): no estimate exists; reported, coefficients withheld. */
static const long double sep_X[] = {
    1, 1.3, 1, 2.1, 1, 2.9, 1, 3.7, 1, 4.2,
    1, 5.6, 1, 6.1, 1, 7.4, 1, 8.8, 1, 9.5};
static const double sep_y[] = {0, 0, 0, 0, 0, 1, 1, 1, 1, 1};

static void test_logistic_reports_complete_separation(void **state)
{
    (void)state;
    logistic_model *m = fit_ok(sep_X, sep_y, 10, 2, 1, 0);
    assert_int_equal(m->separation, SEPARATION_COMPLETE);
    assert_int_equal(m->separating_term, 1);
    assert_int_equal(m->converged, 0);
    assert_true(isnan(m->beta[0]) && isnan(m->beta[1]));
    assert_true(isnan(m->se[1]) && isnan(m->odds[1]));
    assert_true(m->loglik > -1e-6);
    logistic_free(m);
}

static void test_logistic_ridge_makes_separated_fit_finite(void **state)
{
    (void)state;
    logistic_model *m = fit_ok(sep_X, sep_y, 10, 2, 1, 0.5);
    assert_int_equal(m->separation, SEPARATION_NONE);
    assert_int_equal(m->converged, 1);
    assert_true(isfinite(m->beta[0]) && isfinite(m->beta[1]));
    assert_true(m->beta[1] > 0 && m->beta[1] < 100);
    check_ridge_score(sep_X, sep_y, 10, 2, 0.5, m);
    logistic_free(m);
}

/* Quasi-complete: every row with flag = 1 is positive, the rows with
 * flag = 0 overlap on x; flag is the term named. */
static const long double quasi_X[] = {
    1, 0, 2.3, 1, 0, 1.1, 1, 0, 3.8, 1, 0, 0.7, 1, 0, 2.9,
    1, 0, 1.6, 1, 0, 4.4, 1, 0, 3.1, 1, 0, 0.4, 1, 0, 2.2,
    1, 1, 1.9, 1, 1, 3.3, 1, 1, 0.8, 1, 1, 2.6};
static const double quasi_y[] = {1, 0, 1, 0, 0, 1, 1, 0, 0, 1, 1, 1, 1, 1};

static void test_logistic_reports_quasi_separation(void **state)
{
    (void)state;
    logistic_model *m = fit_ok(quasi_X, quasi_y, 14, 3, 1, 0);
    assert_int_equal(m->separation, SEPARATION_QUASI);
    assert_int_equal(m->separating_term, 1);
    assert_int_equal(m->converged, 0);
    for (size_t j = 0; j < 3; j++)
        assert_true(isnan(m->beta[j]) && isnan(m->se[j]));
    logistic_free(m);

    m = fit_ok(quasi_X, quasi_y, 14, 3, 1, 0.2);
    assert_int_equal(m->separation, SEPARATION_NONE);
    assert_int_equal(m->converged, 1);
    for (size_t j = 0; j < 3; j++)
        assert_true(isfinite(m->beta[j]));
    check_ridge_score(quasi_X, quasi_y, 14, 3, 0.2, m);
    logistic_free(m);
}

/* A constant column and a multiple of GPA are dropped with their reasons,
 * and the other estimates are those of the model without them. */
static void test_logistic_drops_constant_and_collinear_terms(void **state)
{
    (void)state;
    dataset d;
    dataset_read("spector", &d);
    size_t p = d.p + 2;
    long double *X = malloc(d.n * p * sizeof *X);
    assert_non_null(X);
    for (size_t i = 0; i < d.n; i++) {
        for (size_t j = 0; j < d.p; j++)
            X[i * p + j] = d.X[i * d.p + j];
        X[i * p + d.p] = 4.25;                      /* constant */
        X[i * p + d.p + 1] = 2 * d.X[i * d.p + 1];  /* 2 * GPA */
    }
    logistic_model *m = fit_ok(X, d.y, d.n, p, 1, 0);
    assert_int_equal(m->rank, d.p);
    assert_int_equal(m->drop[d.p], LINEAR_DROP_CONSTANT);
    assert_int_equal(m->drop[d.p + 1], LINEAR_DROP_COLLINEAR);
    assert_true(m->n_with[d.p + 1] >= 1);
    assert_int_equal(m->with[(d.p + 1) * LINEAR_WITH_MAX], 1);
    assert_true(isnan(m->beta[d.p]) && isnan(m->beta[d.p + 1]));
    for (size_t j = 0; j < d.p; j++) {
        assert_close(m->beta[j], d.beta[j], 1e-9, 0);
        assert_close(m->se[j], d.se[j], 1e-9, 0);
    }
    assert_close(logistic_predict(m, X), m->prob[0], 1e-14, 0);
    logistic_free(m);
    free(X);
    dataset_free(&d);
}

/* Without an intercept the null model is p = 1/2 for every row. */
static void test_logistic_null_model_without_intercept_is_one_half(void **state)
{
    (void)state;
    dataset d;
    dataset_read("spector", &d);
    /* drop the intercept column: X without column 0 */
    size_t p = d.p - 1;
    long double *X = malloc(d.n * p * sizeof *X);
    assert_non_null(X);
    for (size_t i = 0; i < d.n; i++)
        for (size_t j = 0; j < p; j++)
            X[i * p + j] = d.X[i * d.p + j + 1];
    logistic_model *m = fit_ok(X, d.y, d.n, p, 0, 0);
    assert_int_equal(m->converged, 1);
    assert_close(m->null_loglik, 32 * log(0.5), 1e-15, 0);
    assert_true(m->loglik > m->null_loglik);
    logistic_free(m);
    free(X);
    dataset_free(&d);
}

/* logistic_set_beta: the exact coefficients put back give the same
 * measures; moved ones give the log-likelihood of its definition,
 * sum y ln p + (1 - y) ln(1 - p), computed here in long double; standard
 * errors and intervals become NaN. */
static void test_logistic_set_beta_recomputes_measures(void **state)
{
    (void)state;
    dataset d;
    dataset_read("spector", &d);
    logistic_model *m = fit_ok(d.X, d.y, d.n, d.p, 1, 0);
    double beta[MAXT], ll = m->loglik, aic = m->aic, null = m->null_loglik;
    memcpy(beta, m->beta, d.p * sizeof *beta);
    rf_error e = {0};
    assert_int_equal(logistic_set_beta(m, d.X, d.y, beta, &e), RF_OK);
    assert_close(m->loglik, ll, 1e-15, 0);
    assert_close(m->aic, aic, 1e-15, 0);
    beta[1] *= 1.5;
    assert_int_equal(logistic_set_beta(m, d.X, d.y, beta, &e), RF_OK);
    long double want = 0;
    for (size_t i = 0; i < d.n; i++) {
        long double eta = 0;
        for (size_t j = 0; j < d.p; j++)
            eta += d.X[i * d.p + j] * (long double)beta[j];
        long double p = 1 / (1 + expl(-eta));
        want += d.y[i] ? logl(p) : logl(1 - p);
        assert_close(m->prob[i], (double)p, 1e-14, 1e-300);
    }
    assert_true(m->loglik < ll);
    assert_close(m->loglik, (double)want, 1e-13, 0);
    assert_close(m->null_loglik, null, 1e-15, 0);
    assert_close(m->deviance, -2 * (double)want, 1e-13, 0);
    for (size_t j = 0; j < d.p; j++) {
        assert_close(m->odds[j], exp(beta[j]), 1e-15, 0);
        assert_true(isnan(m->se[j]) && isnan(m->z[j]) && isnan(m->pvalue[j])
                    && isnan(m->low[j]) && isnan(m->odds_high[j]));
    }
    logistic_free(m);
    dataset_free(&d);
}

static void test_logistic_rejects_bad_input(void **state)
{
    (void)state;
    long double X[] = {1, 0.5, 1, 1.5, 1, 2.5, 1, 3.5};
    double one[] = {1, 1, 1, 1}, zero[] = {0, 0, 0, 0}, three[] = {0, 1, 2, 1};
    double ok[] = {0, 1, 0, 1};
    fit_fails(X, one, 4, 2, 0, "one value only");
    fit_fails(X, zero, 4, 2, 0, "one value only");
    fit_fails(X, three, 4, 2, 0, "other than 0 or 1");
    fit_fails(X, ok, 2, 2, 0, "only 2 usable rows");
    fit_fails(X, ok, 4, 0, 0, "no terms");
    fit_fails(X, ok, 4, 2, -1, "ridge");
    fit_fails(X, ok, 4, 2, NAN, "ridge");
    X[3] = INFINITY;
    fit_fails(X, ok, 4, 2, 0, "non-finite input");
    X[3] = 1.5;
    long double Z[] = {0, 0, 0, 0};  /* the only term is zero */
    fit_fails(Z, ok, 4, 1, 0, "zero or constant");
}

int main(void)
{
    gsl_set_error_handler_off();
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_logistic_matches_statsmodels_on_spector),
        cmocka_unit_test(test_logistic_matches_statsmodels_on_anes96),
        cmocka_unit_test(test_logistic_derived_measures_follow_definitions),
        cmocka_unit_test(test_logistic_ridge_solves_penalized_score),
        cmocka_unit_test(test_logistic_ridge_does_not_depend_on_units),
        cmocka_unit_test(test_logistic_reports_complete_separation),
        cmocka_unit_test(test_logistic_ridge_makes_separated_fit_finite),
        cmocka_unit_test(test_logistic_reports_quasi_separation),
        cmocka_unit_test(test_logistic_drops_constant_and_collinear_terms),
        cmocka_unit_test(test_logistic_null_model_without_intercept_is_one_half),
        cmocka_unit_test(test_logistic_set_beta_recomputes_measures),
        cmocka_unit_test(test_logistic_rejects_bad_input),
    };
    return cmocka_run_group_tests_name("logistic", tests, NULL, NULL);
}
