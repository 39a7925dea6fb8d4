/*
 * test_ridge.c: the exact ridge fit and the ridge path (engine/ridge.c)
 * against answers computed by other means: gradient descent on the same
 * cost (engine/gradient.c), the penalised normal equations solved here by
 * Gaussian elimination in long double, ordinary least squares
 * (engine/linear.c), and the trace of the hat matrix computed here. Also
 * the properties the penalty is built to have (units, the limit of a huge
 * penalty, shared weight between nearly equal columns, honest folds) and
 * every input error.
 */
#include "testutil.h"

#include <float.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_errno.h>

#include "../engine/gradient.h"
#include "../engine/linear.h"
#include "../engine/ridge.h"

/* An invented greenhouse trial: the yield of a tomato bed (kg) from an
 * intercept, water (litres a day), light (hours), temperature (deg C), pot
 * size (litres, tied to the water given) and fertiliser (g a week), so the
 * inputs are correlated and of different scales. Column 0 is 1 when
 * intercept, else the design starts at water (G_P - 1 columns). */
#define G_P 6
static void greenhouse(size_t n, int intercept, long double *X,
                       long double *y, uint64_t seed)
{
    tu_rng r = { seed };
    size_t p = intercept ? G_P : G_P - 1, o = intercept ? 1 : 0;
    for (size_t i = 0; i < n; i++) {
        long double *x = X + i * p;
        double water = 2.5 + 0.6 * tu_normal(&r);
        double light = 11 + 1.5 * tu_normal(&r);
        double temp = 22 + 3 * tu_normal(&r);
        double pot = 4 * water + 1.9 + 1.3 * tu_normal(&r);
        double fert = floor(40 * tu_uniform(&r)) + 0.25;
        if (intercept)
            x[0] = 1;
        x[o + 0] = water;
        x[o + 1] = light;
        x[o + 2] = temp;
        x[o + 3] = pot;
        x[o + 4] = fert;
        y[i] = 3.125 + 1.85 * water + 0.42 * light - 0.093 * temp
               + 0.31 * pot + 0.0275 * fert + 0.8 * tu_normal(&r);
    }
}

static void fit_ok(const long double *X, const long double *y, size_t n,
                   size_t p, int intercept, const linear_drop *drop,
                   double lambda, double *beta)
{
    rf_error e = {0};
    rf_status s = ridge_fit(X, y, n, p, intercept, drop, lambda, beta, &e);
    if (s != RF_OK)
        fail_msg("ridge_fit(lambda %g) failed: %s", lambda, e.message);
}

static ridge_path *path_ok(const long double *X, const long double *y,
                           size_t n, size_t p, int intercept,
                           const linear_drop *drop, const size_t *rows,
                           size_t n_rows)
{
    ridge_path *r = NULL;
    rf_error e = {0};
    rf_status s = ridge_path_create(X, y, n, p, intercept, drop, rows, n_rows,
                                    &r, &e);
    if (s != RF_OK)
        fail_msg("ridge_path_create failed: %s", e.message);
    assert_non_null(r);
    return r;
}

static void solve_ok(const ridge_path *r, double lambda, double *beta)
{
    rf_error e = {0};
    rf_status s = ridge_path_solve(r, lambda, beta, &e);
    if (s != RF_OK)
        fail_msg("ridge_path_solve(lambda %g) failed: %s", lambda, e.message);
}

/* Column j's spread over rows as ridge.h defines s_j: standard deviation
 * (divisor n) with an intercept, root mean square without; two passes in
 * long double. */
static long double spread(const long double *X, size_t n, size_t p, size_t j,
                          int intercept, long double *mean)
{
    long double s = 0, ss = 0;
    for (size_t i = 0; i < n; i++)
        s += X[i * p + j];
    long double c = intercept ? s / n : 0;
    for (size_t i = 0; i < n; i++)
        ss += (X[i * p + j] - c) * (X[i * p + j] - c);
    if (mean != NULL)
        *mean = s / n;
    return sqrtl(ss / n);
}

/* The penalised normal equations in the original units, with no centring:
 * (X'X + lambda D) b = X'y, D = diag(s_j^2) over the penalised kept terms
 * and 0 for the intercept (Hoerl & Kennard, Technometrics 12 (1970) 55;
 * with the intercept unpenalised the centred and uncentred forms have the
 * same minimiser). Dropped terms are left out; they get NaN. */
static void normal_equations(const long double *X, const long double *y,
                             size_t n, size_t p, int intercept,
                             const linear_drop *drop, double lambda,
                             long double *b)
{
    size_t col[16], q = 0;
    assert_true(p <= 16);
    for (size_t j = 0; j < p; j++)
        if (drop == NULL || drop[j] == LINEAR_KEPT)
            col[q++] = j;
    long double A[256] = {0}, c[16] = {0};
    for (size_t i = 0; i < n; i++)
        for (size_t a = 0; a < q; a++) {
            c[a] += X[i * p + col[a]] * y[i];
            for (size_t k = 0; k < q; k++)
                A[a * q + k] += X[i * p + col[a]] * X[i * p + col[k]];
        }
    for (size_t a = 0; a < q; a++) {
        if (intercept && col[a] == 0)
            continue;
        long double s = spread(X, n, p, col[a], intercept, NULL);
        A[a * q + a] += lambda * s * s;
    }
    tu_gauss_solve(A, c, q);
    for (size_t j = 0; j < p; j++)
        b[j] = NAN;
    for (size_t a = 0; a < q; a++)
        b[col[a]] = c[a];
}

/* Largest |a_j - b_j| relative to |b_j|, over the terms b has, with a
 * floor of 1e-6 of the largest standardized coefficient (in term j's
 * units) so a coefficient passing through 0 along the path is not judged
 * on its own vanishing size. Used to print measured agreement. */
static double worst_rel(const double *a, const double *b, const long double *X,
                        size_t n, size_t p, int intercept)
{
    double big = 0, worst = 0, s[16];
    assert_true(p <= 16);
    for (size_t j = 0; j < p; j++) {
        s[j] = intercept && j == 0 ? 1 : (double)spread(X, n, p, j, intercept,
                                                        NULL);
        if (!isnan(b[j]) && !(intercept && j == 0))
            big = fmax(big, fabs(b[j]) * s[j]);
    }
    for (size_t j = 0; j < p; j++) {
        if (isnan(b[j])) {
            if (!isnan(a[j]))
                return INFINITY;
            continue;
        }
        double floor_j = 1e-6 * (intercept && j == 0 ? fabs(b[0]) : big / s[j]);
        double e = fabs(a[j] - b[j]) / fmax(fabs(b[j]), floor_j);
        worst = fmax(worst, e);
    }
    return worst;
}

/* ------------------------------------------------ against other solvers */

/* Gradient descent minimises the same cost divided by 2n (gradient.h); on
 * a well-conditioned design it runs to its stopping rule (GRADIENT_TOL) and
 * the two must agree far past gradient descent's 6-digit requirement. */
static void test_ridge_fit_matches_gradient_descent(void **state)
{
    (void)state;
    const size_t n = 60;
    long double X[60 * 4], y[60];
    double yd[60];
    tu_rng r = { 2385 };
    /* nearly uncorrelated inputs of different units, so descent converges
     * to the last digits (invented: bed yields from three treatments) */
    for (size_t i = 0; i < n; i++) {
        double a = 1.5 + 0.4 * tu_normal(&r), b = 30 + 7 * tu_normal(&r);
        double c = floor(6 * tu_uniform(&r));
        X[i * 4 + 0] = 1;
        X[i * 4 + 1] = a;
        X[i * 4 + 2] = b;
        X[i * 4 + 3] = c;
        y[i] = 4.75 + 2.2 * a - 0.061 * b + 0.38 * c + 0.5 * tu_normal(&r);
        yd[i] = (double)y[i];
    }
    static const double lambdas[] = { 0, 3.7, 61.5 };
    for (size_t k = 0; k < 3; k++) {
        double beta[4];
        fit_ok(X, y, n, 4, 1, NULL, lambdas[k], beta);
        gradient_model *g = NULL;
        rf_error e = {0};
        assert_int_equal(gradient_fit(X, yd, n, 4, 1, 0, lambdas[k], 0, 0, &g,
                                      &e), RF_OK);
        assert_true(g->converged);
        double w = worst_rel(beta, g->beta, X, n, 4, 1);
        print_message("ridge_fit vs gradient_fit, lambda %g: worst relative "
                      "difference %.2g (%ld epochs)\n", lambdas[k], w,
                      g->iterations);
        for (size_t j = 0; j < 4; j++)
            assert_close(beta[j], g->beta[j], 1e-9, 0);
        gradient_free(g);
    }
}

static void test_ridge_fit_matches_normal_equations(void **state)
{
    (void)state;
    const size_t n = 250;
    long double X[250 * G_P], y[250], b[G_P];
    double beta[G_P];
    for (int icpt = 1; icpt >= 0; icpt--) {
        size_t p = icpt ? G_P : G_P - 1;
        greenhouse(n, icpt, X, y, 4711);
        static const double lambdas[] = { 0.75, 41.3, 2718.0 };
        for (size_t k = 0; k < 3; k++) {
            fit_ok(X, y, n, p, icpt, NULL, lambdas[k], beta);
            normal_equations(X, y, n, p, icpt, NULL, lambdas[k], b);
            double want[G_P];
            for (size_t j = 0; j < p; j++)
                want[j] = (double)b[j];
            print_message("ridge_fit vs normal equations (long double), "
                          "%s intercept, lambda %g: worst relative "
                          "difference %.2g\n", icpt ? "with" : "without",
                          lambdas[k], worst_rel(beta, want, X, n, p, icpt));
            for (size_t j = 0; j < p; j++)
                assert_close(beta[j], want[j], 1e-12, 0);
        }
    }
}

/* lambda 0 is ordinary least squares, which linear_fit solves by pivoted
 * QR with extended-precision refinement. */
static void test_ridge_zero_penalty_is_least_squares(void **state)
{
    (void)state;
    const size_t n = 300;
    long double X[300 * G_P], y[300];
    double beta[G_P], via_path[G_P];
    for (int icpt = 1; icpt >= 0; icpt--) {
        size_t p = icpt ? G_P : G_P - 1;
        greenhouse(n, icpt, X, y, 99);
        linear_model *m = NULL;
        rf_error e = {0};
        assert_int_equal(linear_fit(X, y, n, p, icpt, 0.95, &m, &e), RF_OK);
        fit_ok(X, y, n, p, icpt, m->drop, 0, beta);
        ridge_path *r = path_ok(X, y, n, p, icpt, m->drop, NULL, 0);
        solve_ok(r, 0, via_path);
        print_message("lambda 0 vs linear_fit, %s intercept: ridge_fit %.2g, "
                      "path %.2g worst relative difference\n",
                      icpt ? "with" : "without",
                      worst_rel(beta, m->beta, X, n, p, icpt),
                      worst_rel(via_path, m->beta, X, n, p, icpt));
        for (size_t j = 0; j < p; j++) {
            assert_close(beta[j], m->beta[j], 1e-12, 0);
            assert_close(via_path[j], m->beta[j], 1e-12, 0);
        }
        /* the path's effective degrees of freedom at 0: the rank */
        assert_close(ridge_path_df(r, 0), (double)m->rank, 1e-12, 0);
        ridge_path_free(r);
        linear_free(m);
    }
}

/* NIST StRD Longley (tests/nist/Longley.dat: data lines 61-76,
 * certified values lines 31-37): ordinary least squares on six highly
 * correlated economic series, "higher level of difficulty". At lambda 0
 * ridge_fit and the path are least squares on the standardized columns,
 * whose condition is far below that of the raw ones. The log relative
 * error (LRE, -log10 |b - c| / |c|) is printed and must be at least 10. */
static void test_ridge_zero_penalty_on_nist_longley(void **state)
{
    (void)state;
    FILE *f = fopen("tests/nist/Longley.dat", "r");
    assert_non_null(f);
    char line[256];
    long double X[16 * 7], y[16];
    double cert[7];
    int line_no = 0;
    size_t i = 0;
    while (fgets(line, sizeof line, f) != NULL) {
        line_no++;
        if (line_no >= 31 && line_no <= 37) {
            int k;
            double est, sd;
            assert_int_equal(sscanf(line, " B%d %lf %lf", &k, &est, &sd), 3);
            assert_int_equal(k, line_no - 31);
            cert[k] = est;
        } else if (line_no >= 61 && line_no <= 76) {
            double v[7];
            assert_int_equal(sscanf(line, "%lf %lf %lf %lf %lf %lf %lf", &v[0],
                                    &v[1], &v[2], &v[3], &v[4], &v[5], &v[6]),
                             7);
            y[i] = v[0];
            X[i * 7] = 1;
            for (size_t j = 1; j < 7; j++)
                X[i * 7 + j] = v[j];
            i++;
        }
    }
    fclose(f);
    assert_int_equal(i, 16);
    double a[7], b[7], lre_fit = 99, lre_path = 99;
    fit_ok(X, y, 16, 7, 1, NULL, 0, a);
    ridge_path *r = path_ok(X, y, 16, 7, 1, NULL, NULL, 0);
    solve_ok(r, 0, b);
    for (size_t j = 0; j < 7; j++) {
        lre_fit = fmin(lre_fit, -log10(fabs(a[j] - cert[j]) / fabs(cert[j])));
        lre_path = fmin(lre_path, -log10(fabs(b[j] - cert[j])
                                         / fabs(cert[j])));
    }
    print_message("NIST Longley at lambda 0: smallest LRE %.1f (ridge_fit), "
                  "%.1f (path)\n", lre_fit, lre_path);
    assert_true(lre_fit >= 10);
    assert_true(lre_path >= 10);
    ridge_path_free(r);
}

/* ---------------------------------------------------------- the path */

/* path_solve against ridge_fit at every grid value for one design. */
static double path_vs_fit(const long double *X, const long double *y,
                          size_t n, size_t p, int intercept,
                          const linear_drop *drop)
{
    ridge_path *r = path_ok(X, y, n, p, intercept, drop, NULL, 0);
    assert_int_equal(ridge_path_rows(r), n);
    double grid[RIDGE_GRID], worst = 0;
    ridge_grid(n, grid);
    for (size_t k = 0; k < RIDGE_GRID; k++) {
        double a[16], b[16];
        solve_ok(r, grid[k], a);
        fit_ok(X, y, n, p, intercept, drop, grid[k], b);
        double w = worst_rel(a, b, X, n, p, intercept);
        worst = fmax(worst, w);
        if (!(w <= 1e-10))
            fail_msg("grid value %zu (%g): path and fit differ by %g", k,
                     grid[k], w);
    }
    ridge_path_free(r);
    return worst;
}

static void test_ridge_path_matches_fit_on_grid(void **state)
{
    (void)state;
    const size_t n = 400;
    long double X[400 * G_P], y[400];
    for (int icpt = 1; icpt >= 0; icpt--) {
        size_t p = icpt ? G_P : G_P - 1;
        greenhouse(n, icpt, X, y, 31337);
        print_message("path vs ridge_fit over the grid, %s intercept: worst "
                      "relative difference %.2g\n", icpt ? "with" : "without",
                      path_vs_fit(X, y, n, p, icpt, NULL));
    }
}

/* A term linear_fit drops (an exact combination of two others) is skipped
 * by both and gets NaN; the rest equal the fit without that column. */
static void test_ridge_skips_dropped_term(void **state)
{
    (void)state;
    const size_t n = 200, p = G_P + 1;
    long double X0[200 * G_P], y[200], X[200 * (G_P + 1)];
    greenhouse(n, 1, X0, y, 555);
    for (size_t i = 0; i < n; i++) {
        for (size_t j = 0; j < G_P; j++)
            X[i * p + j] = X0[i * G_P + j];
        X[i * p + G_P] = X0[i * G_P + 1] + X0[i * G_P + 2];  /* water+light */
    }
    linear_model *m = NULL;
    rf_error e = {0};
    assert_int_equal(linear_fit(X, y, n, p, 1, 0.95, &m, &e), RF_OK);
    assert_int_equal(m->drop[G_P], LINEAR_DROP_COLLINEAR);
    print_message("path vs ridge_fit over the grid, a dropped term: worst "
                  "relative difference %.2g\n",
                  path_vs_fit(X, y, n, p, 1, m->drop));
    double a[G_P + 1], b[G_P];
    fit_ok(X, y, n, p, 1, m->drop, 87.5, a);
    fit_ok(X0, y, n, G_P, 1, NULL, 87.5, b);
    assert_true(isnan(a[G_P]));
    for (size_t j = 0; j < G_P; j++)
        assert_close(a[j], b[j], 1e-13, 0);
    /* a dropped column may hold anything, even a non-finite value */
    X[5 * p + G_P] = NAN;
    fit_ok(X, y, n, p, 1, m->drop, 87.5, a);
    assert_close(a[1], b[1], 1e-13, 0);
    linear_free(m);
}

/* A path on a training fold equals ridge_fit on a copy of those rows: its
 * centring and scales come from the fold alone. */
static void test_ridge_path_on_row_subset(void **state)
{
    (void)state;
    const size_t n = 500;
    long double X[500 * G_P], y[500], Xs[500 * G_P], ys[500];
    size_t rows[500];
    for (int icpt = 1; icpt >= 0; icpt--) {
        size_t p = icpt ? G_P : G_P - 1;
        greenhouse(n, icpt, X, y, 8086);
        /* four folds of five, interleaved; train on all but fold 2, and
         * shift the held-out rows far off so any leak would show */
        size_t m = 0;
        for (size_t i = 0; i < n; i++) {
            if (i % 5 == 2) {
                y[i] += 1000;
                X[i * p + p - 1] *= 50;
                continue;
            }
            rows[m] = i;
            memcpy(Xs + m * p, X + i * p, p * sizeof *X);
            ys[m] = y[i];
            m++;
        }
        ridge_path *r = path_ok(X, y, n, p, icpt, NULL, rows, m);
        assert_int_equal(ridge_path_rows(r), m);
        double grid[RIDGE_GRID], worst = 0;
        ridge_grid(m, grid);
        for (size_t k = 0; k < RIDGE_GRID; k++) {
            double a[G_P], b[G_P];
            solve_ok(r, grid[k], a);
            fit_ok(Xs, ys, m, p, icpt, NULL, grid[k], b);
            worst = fmax(worst, worst_rel(a, b, Xs, m, p, icpt));
            for (size_t j = 0; j < p; j++)
                assert_close(a[j], b[j], 1e-10, 0);
        }
        print_message("path on %zu of %zu rows vs ridge_fit on their copy, "
                      "%s intercept: worst relative difference %.2g\n", m, n,
                      icpt ? "with" : "without", worst);
        ridge_path_free(r);
    }
}

/* A kept term with no spread in a training fold (an indicator whose
 * category is missing there) gets 0, and the rest of the fit is the fit
 * without it. */
static void test_ridge_idle_term_in_fold(void **state)
{
    (void)state;
    const size_t n = 120, p = G_P + 1;
    long double X0[120 * G_P], y[120], X[120 * (G_P + 1)];
    size_t rows[120], m = 0;
    greenhouse(n, 1, X0, y, 1234);
    for (size_t i = 0; i < n; i++) {
        memcpy(X + i * p, X0 + i * G_P, G_P * sizeof *X);
        X[i * p + G_P] = i % 6 == 0;   /* a rare variety: only in fold 0 */
        if (i % 6 != 0)
            rows[m++] = i;
    }
    ridge_path *r = path_ok(X, y, n, p, 1, NULL, rows, m);
    ridge_path *r0 = path_ok(X0, y, n, G_P, 1, NULL, rows, m);
    double a[G_P + 1], b[G_P];
    solve_ok(r, 12.5, a);
    solve_ok(r0, 12.5, b);
    assert_true(a[G_P] == 0);
    for (size_t j = 0; j < G_P; j++)
        assert_close(a[j], b[j], 1e-14, 0);
    /* at 0 as well, and its degrees of freedom do not count it */
    solve_ok(r, 0, a);
    assert_true(a[G_P] == 0);
    assert_close(ridge_path_df(r, 0), G_P, 1e-12, 0);
    ridge_path_free(r);
    ridge_path_free(r0);
}

/* ------------------------------------------------------------ properties */

/* The penalty is on standardized coefficients, so a change of units (grams
 * for kilograms) rescales the coefficient and leaves the fit alone. */
static void test_ridge_units_do_not_change_the_fit(void **state)
{
    (void)state;
    const size_t n = 150;
    long double X[150 * G_P], y[150], X2[150 * G_P];
    for (int icpt = 1; icpt >= 0; icpt--) {
        size_t p = icpt ? G_P : G_P - 1, w = p - 1;  /* fertiliser */
        greenhouse(n, icpt, X, y, 777);
        memcpy(X2, X, n * p * sizeof *X);
        for (size_t i = 0; i < n; i++)
            X2[i * p + w] *= 1000;
        double a[G_P], b[G_P];
        fit_ok(X, y, n, p, icpt, NULL, 33.3, a);
        fit_ok(X2, y, n, p, icpt, NULL, 33.3, b);
        for (size_t j = 0; j < p; j++)
            assert_close(b[j] * (j == w ? 1000 : 1), a[j], 1e-12, 0);
        double worst = 0;
        for (size_t i = 0; i < n; i++) {
            long double fa = 0, fb = 0;
            for (size_t j = 0; j < p; j++) {
                fa += a[j] * X[i * p + j];
                fb += b[j] * X2[i * p + j];
            }
            worst = fmax(worst, fabs((double)((fa - fb) / fa)));
            assert_close((double)fb, (double)fa, 1e-12, 0);
        }
        print_message("input x1000, %s intercept: fitted values agree to "
                      "%.2g relative\n", icpt ? "with" : "without", worst);
        /* and the penalty does bite: lambda 33.3 is not least squares */
        double o[G_P];
        fit_ok(X, y, n, p, icpt, NULL, 0, o);
        assert_true(fabs(o[1] - a[1]) > 1e-3 * fabs(o[1]));
    }
}

/* Adding a constant to y changes only the intercept (exact algebra: the
 * intercept is not penalised). A target far from 0 (readings near 2^27,
 * spread about 1) costs ridge_fit no digits, because y is centred before
 * the factorization; uncentred, Q'y would carry rounding of 2^27 times the
 * unit roundoff and the slopes would lose about 8 digits. The targets are
 * multiples of 2^-20, so y + 2^27 is exact in a double. */
static void test_ridge_target_far_from_zero(void **state)
{
    (void)state;
    const size_t n = 240;
    long double X[240 * G_P], y[240], y2[240];
    greenhouse(n, 1, X, y, 65536);
    for (size_t i = 0; i < n; i++) {
        y[i] = roundl(y[i] * 1048576) / 1048576;
        y2[i] = y[i] + 134217728.0L;
        assert_true((long double)(double)y2[i] == y2[i]);
    }
    double a[G_P], b[G_P], c[G_P];
    fit_ok(X, y, n, G_P, 1, NULL, 19.25, a);
    fit_ok(X, y2, n, G_P, 1, NULL, 19.25, b);
    ridge_path *r = path_ok(X, y2, n, G_P, 1, NULL, NULL, 0);
    solve_ok(r, 19.25, c);
    double worst = 0;
    for (size_t j = 1; j < G_P; j++) {
        worst = fmax(worst, fabs(b[j] - a[j]) / fabs(a[j]));
        assert_close(b[j], a[j], 1e-12, 0);
        assert_close(c[j], a[j], 1e-12, 0);
    }
    assert_close(b[0], a[0] + 134217728.0, 1e-15, 0);
    assert_close(c[0], a[0] + 134217728.0, 1e-15, 0);
    print_message("y + 2^27: slopes agree with those for y to %.2g "
                  "relative\n", worst);
    ridge_path_free(r);
}

/* As lambda grows every penalised coefficient goes to 0 and the intercept
 * to the mean of y, the intercept-only fit (ESL, 2nd ed., sec. 3.4.1). */
static void test_ridge_huge_penalty_leaves_the_mean(void **state)
{
    (void)state;
    const size_t n = 200;
    long double X[200 * G_P], y[200];
    for (int icpt = 1; icpt >= 0; icpt--) {
        size_t p = icpt ? G_P : G_P - 1;
        greenhouse(n, icpt, X, y, 2024);
        long double ysum = 0, yss = 0;
        for (size_t i = 0; i < n; i++)
            ysum += y[i];
        for (size_t i = 0; i < n; i++)
            yss += (y[i] - ysum / n) * (y[i] - ysum / n);
        double sdy = (double)sqrtl(yss / n), rmsy = 0;
        for (size_t i = 0; i < n; i++)
            rmsy += (double)(y[i] * y[i]) / n;
        rmsy = sqrt(rmsy);
        double big = 1e14 * n, a[G_P], b[G_P];
        fit_ok(X, y, n, p, icpt, NULL, big, a);
        ridge_path *r = path_ok(X, y, n, p, icpt, NULL, NULL, 0);
        solve_ok(r, big, b);
        for (size_t j = icpt ? 1 : 0; j < p; j++) {
            double s = (double)spread(X, n, p, j, icpt, NULL);
            /* standardized coefficient against the target's spread */
            assert_true(fabs(a[j]) * s < 1e-9 * (icpt ? sdy : rmsy));
            assert_true(fabs(b[j]) * s < 1e-9 * (icpt ? sdy : rmsy));
        }
        if (icpt) {
            assert_close(a[0], (double)(ysum / n), 1e-9, 0);
            assert_close(b[0], (double)(ysum / n), 1e-9, 0);
        }
        /* degrees of freedom fall to the intercept alone */
        assert_close(ridge_path_df(r, big), icpt ? 1 : 0, 0, 1e-9);
        ridge_path_free(r);
    }
}

/* ESL's effective degrees of freedom against the trace of the hat matrix
 * computed here: tr(X (X'X + lambda D)^-1 X') = tr((X'X + lambda D)^-1
 * X'X), by Gaussian elimination in long double, one column at a time. */
static void test_ridge_df_is_trace_of_hat_matrix(void **state)
{
    (void)state;
    const size_t n = 180, p = G_P;
    long double X[180 * G_P], y[180];
    greenhouse(n, 1, X, y, 42);
    ridge_path *r = path_ok(X, y, n, p, 1, NULL, NULL, 0);
    double grid[RIDGE_GRID], last = INFINITY;
    ridge_grid(n, grid);
    for (size_t k = 0; k < RIDGE_GRID; k += 5) {
        long double G[G_P * G_P] = {0}, tr = 0;
        for (size_t i = 0; i < n; i++)
            for (size_t a = 0; a < p; a++)
                for (size_t c = 0; c < p; c++)
                    G[a * p + c] += X[i * p + a] * X[i * p + c];
        for (size_t c = 0; c < p; c++) {
            long double A[G_P * G_P], col[G_P];
            memcpy(A, G, sizeof A);
            for (size_t a = 1; a < p; a++) {
                long double s = spread(X, n, p, a, 1, NULL);
                A[a * p + a] += grid[k] * s * s;
            }
            for (size_t a = 0; a < p; a++)
                col[a] = G[a * p + c];
            tu_gauss_solve(A, col, p);
            tr += col[c];
        }
        double df = ridge_path_df(r, grid[k]);
        assert_close(df, (double)tr, 1e-12, 0);
        assert_true(df < last);
        last = df;
    }
    assert_true(isnan(ridge_path_df(r, -1)));
    ridge_path_free(r);
}

/* Two nearly equal columns (a probe read twice, the second reading off by
 * a little noise): least squares splits their effect wildly, ridge shares
 * it (Hoerl & Kennard 1970, sec. 1; ESL sec. 3.4.1). */
static void test_ridge_shares_between_nearly_equal_columns(void **state)
{
    (void)state;
    const size_t n = 300, p = 3;
    long double X[300 * 3], y[300];
    tu_rng r = { 6502 };
    for (size_t i = 0; i < n; i++) {
        double t = 20 + 4 * tu_normal(&r);
        X[i * p + 0] = 1;
        X[i * p + 1] = t;
        X[i * p + 2] = t + 1e-5 * tu_normal(&r);
        y[i] = 7.5 + 0.9 * t + 1.5 * tu_normal(&r);
    }
    linear_model *m = NULL;
    rf_error e = {0};
    assert_int_equal(linear_fit(X, y, n, p, 1, 0.95, &m, &e), RF_OK);
    assert_int_equal(m->rank, 3);   /* linear_fit keeps both */
    double grid[RIDGE_GRID], o[3], a[3];
    ridge_grid(n, grid);
    fit_ok(X, y, n, p, 1, m->drop, 0, o);
    fit_ok(X, y, n, p, 1, m->drop, grid[10], a);   /* n * 10^-2.9 */
    print_message("nearly equal columns: least squares %.4g and %.4g, "
                  "ridge (lambda %g) %.6g and %.6g\n", o[1], o[2], grid[10],
                  a[1], a[2]);
    assert_true(fabs(o[1] - o[2]) > 1);           /* split wildly */
    assert_true(isfinite(a[1]) && isfinite(a[2]));
    assert_close(a[1], a[2], 1e-3, 0);            /* shared */
    assert_close(a[1] + a[2], 0.9, 0.05, 0);      /* the effect, once */
    ridge_path *rp = path_ok(X, y, n, p, 1, m->drop, NULL, 0);
    double b[3];
    solve_ok(rp, grid[10], b);
    for (size_t j = 0; j < 3; j++)
        assert_close(b[j], a[j], 1e-9, 0);
    ridge_path_free(rp);
    linear_free(m);
}

/* Exactly equal columns in the fitted rows: ridge_fit separates them for
 * any lambda > 0 and refuses lambda 0; the path at 0 gives the
 * minimum-norm solution, the limit of small lambda. */
static void test_ridge_exactly_collinear_columns(void **state)
{
    (void)state;
    const size_t n = 100, p = 3;
    long double X[100 * 3], y[100];
    tu_rng r = { 8080 };
    for (size_t i = 0; i < n; i++) {
        double t = 5 + tu_normal(&r);
        X[i * p + 0] = 1;
        X[i * p + 1] = t;
        X[i * p + 2] = t;
        y[i] = 2 + 3 * t + 0.25 * tu_normal(&r);
    }
    double a[3] = { 0, 0, 0 };
    rf_error e = {0};
    assert_int_equal(ridge_fit(X, y, n, p, 1, NULL, 0, a, &e), RF_EINPUT);
    assert_non_null(strstr(e.message, "collinear"));
    assert_true(a[0] == 0);   /* untouched on error */
    fit_ok(X, y, n, p, 1, NULL, 1e-3, a);
    assert_close(a[1], a[2], 1e-9, 0);
    ridge_path *rp = path_ok(X, y, n, p, 1, NULL, NULL, 0);
    double b[3], c[3];
    solve_ok(rp, 0, b);
    solve_ok(rp, 1e-3, c);
    /* minimum norm: the slope of y on t, halved between the two */
    linear_model *m = NULL;
    long double X1[200];
    for (size_t i = 0; i < n; i++) {
        X1[2 * i] = 1;
        X1[2 * i + 1] = X[i * p + 1];
    }
    assert_int_equal(linear_fit(X1, y, n, 2, 1, 0.95, &m, &e), RF_OK);
    assert_close(b[1], m->beta[1] / 2, 1e-10, 0);
    assert_close(b[2], m->beta[1] / 2, 1e-10, 0);
    assert_close(b[0], m->beta[0], 1e-10, 0);
    for (size_t j = 0; j < 3; j++)
        assert_close(c[j], a[j], 1e-8, 0);
    assert_close(ridge_path_df(rp, 0), 2, 1e-12, 0);
    linear_free(m);
    ridge_path_free(rp);
}

/* Only the intercept varies nothing: every other term idle, so the fit is
 * the mean; a one-row fold is the extreme case. */
static void test_ridge_intercept_only(void **state)
{
    (void)state;
    long double X[4 * 2] = { 1, 3.5, 1, 3.5, 1, 3.5, 1, 3.5 };
    long double y[4] = { 2.25, 4.0, 1.5, 3.0 };
    double a[2];
    fit_ok(X, y, 4, 2, 1, NULL, 5, a);
    assert_close(a[0], 2.6875, 1e-15, 0);
    assert_true(a[1] == 0);
    size_t one = 2;
    ridge_path *r = path_ok(X, y, 4, 2, 1, NULL, &one, 1);
    solve_ok(r, 0, a);
    assert_close(a[0], 1.5, 1e-15, 0);
    assert_close(ridge_path_df(r, 0), 1, 0, 0);
    ridge_path_free(r);
}

/* --------------------------------------------------------------- grid */

static void test_ridge_grid_is_relative_and_log_spaced(void **state)
{
    (void)state;
    double g[RIDGE_GRID], h[RIDGE_GRID];
    ridge_grid(1000, g);
    ridge_grid(250, h);
    assert_true(g[0] == 0);
    assert_close(g[1], 1000 * 1e-6, 1e-14, 0);
    assert_close(g[RIDGE_GRID - 1], 1000 * 1e3, 1e-14, 0);
    double ratio = pow(10.0, 9.0 / (RIDGE_GRID - 2));
    for (size_t k = 1; k < RIDGE_GRID; k++) {
        if (k > 1)
            assert_close(g[k] / g[k - 1], ratio, 1e-13, 0);
        /* the same position means the same penalty per row */
        assert_close(g[k] / 1000, h[k] / 250, 1e-14, 0);
    }
}

/* ------------------------------------------------------------ bad input */

static void fails(rf_status got, const rf_error *e, const char *fragment)
{
    assert_int_equal(got, RF_EINPUT);
    assert_int_equal(e->status, RF_EINPUT);
    if (strstr(e->message, fragment) == NULL)
        fail_msg("message '%s' lacks '%s'", e->message, fragment);
}

static void test_ridge_rejects_bad_input(void **state)
{
    (void)state;
    long double X[8] = { 1, 2.5, 1, 3.75, 1, 1.125, 1, 4.0 };
    long double y[4] = { 0.5, 1.25, 2.0, 0.75 };
    double b[2] = { 9, 9 };
    rf_error e = {0};
    linear_drop all_out[2] = { LINEAR_DROP_ZERO, LINEAR_DROP_ZERO };
    linear_drop no_icpt[2] = { LINEAR_DROP_CONSTANT, LINEAR_KEPT };

    fails(ridge_fit(X, y, 4, 2, 1, NULL, -1, b, &e), &e, "ridge penalty");
    fails(ridge_fit(X, y, 4, 2, 1, NULL, NAN, b, &e), &e, "ridge penalty");
    fails(ridge_fit(X, y, 4, 2, 1, NULL, INFINITY, b, &e), &e,
          "ridge penalty");
    fails(ridge_fit(X, y, 0, 2, 1, NULL, 1, b, &e), &e, "no rows");
    fails(ridge_fit(X, y, 4, 0, 1, NULL, 1, b, &e), &e, "no terms");
    fails(ridge_fit(X, y, 4, LINEAR_RANK_MAX + 1, 1, NULL, 1, b, &e), &e,
          "at most");
    fails(ridge_fit(X, y, 4, 2, 0, all_out, 1, b, &e), &e, "every term");
    fails(ridge_fit(X, y, 4, 2, 1, no_icpt, 1, b, &e), &e, "intercept");
    long double y2[4] = { 0.5, NAN, 2.0, 0.75 };
    fails(ridge_fit(X, y2, 4, 2, 1, NULL, 1, b, &e), &e,
          "row 2 has a non-finite target");
    long double X2[8] = { 1, 2.5, 1, 3.75, 1, -INFINITY, 1, 4.0 };
    fails(ridge_fit(X2, y, 4, 2, 1, NULL, 1, b, &e), &e,
          "row 3 has a non-finite input");
    long double X3[8] = { 1, 2.5, 1, 3.75, 1, 1.125, 0.5, 4.0 };
    fails(ridge_fit(X3, y, 4, 2, 1, NULL, 1, b, &e), &e,
          "intercept column is not 1");
    assert_true(b[0] == 9 && b[1] == 9);   /* never written on error */

    ridge_path *r = (ridge_path *)&r;      /* must be reset to NULL */
    size_t rows[2] = { 1, 4 };
    fails(ridge_path_create(X, y, 4, 2, 1, NULL, rows, 2, &r, &e), &e,
          "past the 4 rows");
    assert_null(r);
    fails(ridge_path_create(X, y, 4, 2, 1, NULL, rows, 0, &r, &e), &e,
          "no rows");
    fails(ridge_path_create(X, y, 0, 2, 1, NULL, NULL, 7, &r, &e), &e,
          "no rows");
    /* the non-finite row is outside the fold: not looked at */
    size_t fold[3] = { 0, 1, 3 };
    r = path_ok(X2, y, 4, 2, 1, NULL, fold, 3);
    fails(ridge_path_solve(r, -0.5, b, &e), &e, "ridge penalty");
    fails(ridge_path_solve(r, NAN, b, &e), &e, "ridge penalty");
    assert_true(b[0] == 9 && b[1] == 9);
    solve_ok(r, 0, b);
    ridge_path_free(r);
    ridge_path_free(NULL);
}

int main(void)
{
    /* as main() does: GSL reports, never aborts */
    gsl_set_error_handler_off();
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_ridge_fit_matches_gradient_descent),
        cmocka_unit_test(test_ridge_fit_matches_normal_equations),
        cmocka_unit_test(test_ridge_zero_penalty_is_least_squares),
        cmocka_unit_test(test_ridge_zero_penalty_on_nist_longley),
        cmocka_unit_test(test_ridge_path_matches_fit_on_grid),
        cmocka_unit_test(test_ridge_skips_dropped_term),
        cmocka_unit_test(test_ridge_path_on_row_subset),
        cmocka_unit_test(test_ridge_idle_term_in_fold),
        cmocka_unit_test(test_ridge_units_do_not_change_the_fit),
        cmocka_unit_test(test_ridge_target_far_from_zero),
        cmocka_unit_test(test_ridge_huge_penalty_leaves_the_mean),
        cmocka_unit_test(test_ridge_df_is_trace_of_hat_matrix),
        cmocka_unit_test(test_ridge_shares_between_nearly_equal_columns),
        cmocka_unit_test(test_ridge_exactly_collinear_columns),
        cmocka_unit_test(test_ridge_intercept_only),
        cmocka_unit_test(test_ridge_grid_is_relative_and_log_spaced),
        cmocka_unit_test(test_ridge_rejects_bad_input),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
