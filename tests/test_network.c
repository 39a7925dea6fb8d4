/*
 * test_network.c: the network model (engine/network.c). Its gradient
 * against centred finite differences and its objective against a forward
 * pass written here; what it learns against what a linear model can
 * (engine/linear.c, engine/logistic.c) on invented data with a known
 * shape; determinism, both solvers, restarts, early stopping, the epoch
 * cap, permutation importance, and every input error.
 */
#include "testutil.h"

#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_cblas.h>
#include <gsl/gsl_errno.h>
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>

#include "../engine/linear.h"
#include "../engine/logistic.h"
#include "../engine/network.h"

static gsl_rng *rng_new(unsigned long seed)
{
    gsl_rng *r = gsl_rng_alloc(gsl_rng_mt19937);
    assert_non_null(r);
    gsl_rng_set(r, seed);
    return r;
}

/* ------------------------------------------------------------ gradient */

/* The objective written out here, row by row in long double, with none of
 * network.c's blocks or BLAS: the reference for network_loss_grad's value
 * (the finite differences below check the gradient against it, so a
 * consistent error in both would still be caught here). */
static double objective_by_hand(size_t L, const size_t *units, int classify,
                                const double *theta, const double *Z,
                                const double *t, size_t n, double lambda)
{
    long double sum = 0, pen = 0;
    long double a[1024], b[1024];
    for (size_t i = 0; i < n; i++) {
        for (size_t k = 0; k < units[0]; k++)
            a[k] = Z[i * units[0] + k];
        const double *th = theta;
        for (size_t l = 0; l < L; l++) {
            size_t ni = units[l], no = units[l + 1];
            for (size_t j = 0; j < no; j++) {
                long double s = th[no * ni + j];
                for (size_t k = 0; k < ni; k++)
                    s += th[j * ni + k] * a[k];
                b[j] = l + 1 < L ? tanhl(s) : s;
            }
            memcpy(a, b, no * sizeof *a);
            th += no * ni + no;
        }
        long double z = a[0];
        if (classify)
            sum += logl(1 + expl(z)) - t[i] * z;
        else
            sum += 0.5L * (z - t[i]) * (z - t[i]);
    }
    const double *th = theta;
    for (size_t l = 0; l < L; l++) {
        for (size_t k = 0; k < units[l + 1] * units[l]; k++)
            pen += (long double)th[k] * th[k];
        th += units[l + 1] * units[l] + units[l + 1];
    }
    return (double)(sum / n + 0.5L * lambda * pen);
}

/* Weights uniform on [-1.3, 1.3] for a network of the given shape (their
 * count returned), n rows of standard normal inputs and targets (0/1 with
 * probability 0.4 of a 1 when classify), all from r, allocated here. */
static size_t random_problem(gsl_rng *r, size_t L, const size_t *units,
                             int classify, size_t n, double **theta,
                             double **Z, double **t)
{
    size_t nw = 0;
    for (size_t l = 0; l < L; l++)
        nw += units[l + 1] * units[l] + units[l + 1];
    *theta = malloc(nw * sizeof **theta);
    *Z = malloc((n * units[0] > 0 ? n * units[0] : 1) * sizeof **Z);
    *t = malloc(n * sizeof **t);
    assert_non_null(*theta);
    assert_non_null(*Z);
    assert_non_null(*t);
    for (size_t i = 0; i < nw; i++)
        (*theta)[i] = 1.3 * (2 * gsl_rng_uniform(r) - 1);
    for (size_t i = 0; i < n * units[0]; i++)
        (*Z)[i] = gsl_ran_gaussian(r, 1.0);
    for (size_t i = 0; i < n; i++)
        (*t)[i] = classify ? (double)(gsl_rng_uniform(r) < 0.4)
                           : gsl_ran_gaussian(r, 1.0);
    return nw;
}

/* Every weight of a network of the given shape: the analytic gradient
 * equals the centred difference (f(w+h) - f(w-h)) / 2h (truncation error
 * O(h^2) f''', Nocedal & Wright, 2nd ed., sec. 8.1, eq. 8.7) to a relative
 * 1e-6; entries below 1e-9 in size are compared absolutely, as rounding in
 * f (about 1e-16 f / h with h = 1e-5) is then of their order. The rows
 * cross blocks of the workspace (block rows each) and, from
 * NETWORK_LANE_ROWS rows up, several lanes whose sums are added. */
static void check_gradient_rows(size_t L, const size_t *units, int classify,
                                double lambda, unsigned long seed, size_t n,
                                size_t block)
{
    gsl_rng *r = rng_new(seed);
    double *theta, *Z, *t;
    size_t nw = random_problem(r, L, units, classify, n, &theta, &Z, &t);
    double *grad = malloc(nw * sizeof *grad);
    assert_non_null(grad);
    network_work *w = network_work_alloc(L, units, block);
    assert_non_null(w);
    double ml;
    double f0 = network_loss_grad(L, units, classify, theta, Z, t, n, lambda,
                                  grad, &ml, w);
    assert_close(f0, objective_by_hand(L, units, classify, theta, Z, t, n,
                                       lambda), 1e-13, 0);
    assert_close(ml, objective_by_hand(L, units, classify, theta, Z, t, n, 0),
                 1e-13, 0);
    for (size_t i = 0; i < nw; i++) {
        double keep = theta[i], h = 1e-5 * fmax(1, fabs(keep));
        theta[i] = keep + h;
        double fp = network_loss_grad(L, units, classify, theta, Z, t, n,
                                      lambda, NULL, NULL, w);
        theta[i] = keep - h;
        double fm = network_loss_grad(L, units, classify, theta, Z, t, n,
                                      lambda, NULL, NULL, w);
        theta[i] = keep;
        double fd = (fp - fm) / (2 * h);
        if (!(fabs(grad[i] - fd) <= 1e-6 * fmax(fabs(grad[i]), fabs(fd))
              + 1e-9))
            fail_msg("weight %zu of %zu: analytic %.12g, centred difference "
                     "%.12g", i, nw, grad[i], fd);
    }
    network_work_free(w);
    free(theta);
    free(grad);
    free(Z);
    free(t);
    gsl_rng_free(r);
}

static void check_gradient(size_t L, const size_t *units, int classify,
                           double lambda, unsigned long seed)
{
    check_gradient_rows(L, units, classify, lambda, seed, 20, 7);
}

/* The same checks where a pass is cut into lanes: 2 lanes at 1,100 rows,
 * 4 at 2,100 (NETWORK_LANE_ROWS 512), blocks of 300 rows within each. */
static void test_network_gradient_over_lanes(void **state)
{
    (void)state;
    assert_int_equal(NETWORK_LANE_ROWS, 512);
    const size_t one[3] = { 3, 4, 1 }, two[4] = { 3, 5, 4, 1 };
    for (int classify = 0; classify <= 1; classify++) {
        check_gradient_rows(2, one, classify, 0.21, 41 + classify, 1100, 300);
        check_gradient_rows(3, two, classify, 0, 51 + classify, 2100, 300);
    }
}

static void test_network_gradient_matches_finite_differences(void **state)
{
    (void)state;
    const size_t one[3] = { 3, 4, 1 }, two[4] = { 3, 5, 4, 1 };
    for (int classify = 0; classify <= 1; classify++)
        for (int pen = 0; pen <= 1; pen++) {
            double lambda = pen ? 0.37 : 0;
            check_gradient(2, one, classify, lambda, 11 + classify);
            check_gradient(3, two, classify, lambda, 21 + classify);
        }
    /* no usable input: the network is its biases */
    const size_t none[3] = { 0, 2, 1 };
    check_gradient(2, none, 0, 0.1, 31);
}

/* One hidden layer of 8 to 32 units (a multiple of 8) runs through
 * network.c's fused kernel rather than its general layers: the same
 * checks for each width it serves, with inputs none, few and more than a
 * vector, rows in groups of four and a remainder (23 rows, blocks of 7),
 * and over lanes (1,100 rows, blocks of 300). */
static void test_network_gradient_of_the_fused_layer(void **state)
{
    (void)state;
    const size_t shapes[][3] = { { 3, 8, 1 }, { 11, 16, 1 }, { 2, 24, 1 },
                                 { 9, 32, 1 }, { 0, 8, 1 } };
    for (size_t s = 0; s < sizeof shapes / sizeof shapes[0]; s++)
        for (int classify = 0; classify <= 1; classify++) {
            check_gradient_rows(2, shapes[s], classify, classify ? 0 : 0.29,
                                61 + s * 2 + (size_t)classify, 23, 7);
            if (s == 1)
                check_gradient_rows(2, shapes[s], classify, 0.05,
                                    71 + (size_t)classify, 1100, 300);
        }
}

/* Adam's batches gather their rows as the pass goes
 * (network_loss_grad_rows): the objective, mean loss and gradient over
 * rows idx of Z are the same bits as over those rows copied out first in
 * that order, for the fused kernel's widths and the general layers, inputs
 * fewer than a vector, a whole vector, and one or two vectors and a part
 * (the part's copy overlaps the vector before it), rows drawn with
 * repeats and in no order, over blocks and lanes. Exact equality, as the
 * arithmetic is the same; a row gathered from the wrong place, or a part
 * of one, changes the bits. */
static void check_gathered(size_t L, const size_t *units, int classify,
                           unsigned long seed, size_t n, size_t block)
{
    const size_t m = 3000, q = units[0];
    gsl_rng *r = rng_new(seed);
    double *theta, *Z, *t;
    size_t nw = random_problem(r, L, units, classify, m, &theta, &Z, &t);
    double *g1 = malloc(nw * sizeof *g1), *g2 = malloc(nw * sizeof *g2);
    double *Zc = malloc((n * q > 0 ? n * q : 1) * sizeof *Zc);
    double *tc = malloc(n * sizeof *tc);
    uint32_t *idx = malloc(n * sizeof *idx);
    assert_non_null(g1);
    assert_non_null(g2);
    assert_non_null(Zc);
    assert_non_null(tc);
    assert_non_null(idx);
    for (size_t i = 0; i < n; i++) {
        idx[i] = (uint32_t)gsl_rng_uniform_int(r, m);
        memcpy(Zc + i * q, Z + (size_t)idx[i] * q, q * sizeof *Z);
        tc[i] = t[idx[i]];
    }
    network_work *w = network_work_alloc(L, units, block);
    assert_non_null(w);
    double ml1, ml2;
    double f1 = network_loss_grad(L, units, classify, theta, Zc, tc, n, 0.1,
                                  g1, &ml1, w);
    double f2 = network_loss_grad_rows(L, units, classify, theta, Z, t, idx,
                                       n, 0.1, g2, &ml2, w);
    if (memcmp(&f1, &f2, sizeof f1) != 0 || memcmp(&ml1, &ml2, sizeof ml1)
        || memcmp(g1, g2, nw * sizeof *g1) != 0)
        fail_msg("shape %zu-%zu, %zu rows: gathered objective %.17g, copied "
                 "%.17g", q, units[1], n, f2, f1);
    network_work_free(w);
    free(theta);
    free(g1);
    free(g2);
    free(Z);
    free(Zc);
    free(t);
    free(tc);
    free(idx);
    gsl_rng_free(r);
}

static void test_network_gathered_rows_equal_copied_rows(void **state)
{
    (void)state;
    const size_t fused[][3] = { { 3, 8, 1 }, { 8, 8, 1 }, { 11, 16, 1 },
                                { 20, 16, 1 }, { 17, 24, 1 }, { 9, 32, 1 },
                                { 0, 8, 1 } };
    const size_t general[3] = { 20, 12, 1 }, deep[4] = { 11, 5, 4, 1 };
    for (int classify = 0; classify <= 1; classify++) {
        unsigned long seed = 81 + 20 * (unsigned long)classify;
        for (size_t s = 0; s < sizeof fused / sizeof fused[0]; s++) {
            check_gathered(2, fused[s], classify, seed++, 23, 7);
            check_gathered(2, fused[s], classify, seed++, 1100, 300);
        }
        check_gathered(2, general, classify, seed++, 1100, 300);
        check_gathered(3, deep, classify, seed++, 23, 7);
        check_gathered(3, deep, classify, seed++, 1100, 300);
    }
}

/* Which path a pass takes. The Makefile links this test with
 * -Wl,--wrap=cblas_dgemv, so network.c's calls to cblas_dgemv come here
 * and are counted: its general layers call it for the output unit of
 * every block, its fused kernel never does. Weak, so that the binary
 * still links without the option; the check then skips. */
void __real_cblas_dgemv(const enum CBLAS_ORDER order,
                        const enum CBLAS_TRANSPOSE ta, const int m,
                        const int n, const double alpha, const double *a,
                        const int lda, const double *x, const int incx,
                        const double beta, double *y, const int incy)
    __attribute__((weak));
void __wrap_cblas_dgemv(const enum CBLAS_ORDER order,
                        const enum CBLAS_TRANSPOSE ta, const int m,
                        const int n, const double alpha, const double *a,
                        const int lda, const double *x, const int incx,
                        const double beta, double *y, const int incy);
static long dgemv_calls;
void __wrap_cblas_dgemv(const enum CBLAS_ORDER order,
                        const enum CBLAS_TRANSPOSE ta, const int m,
                        const int n, const double alpha, const double *a,
                        const int lda, const double *x, const int incx,
                        const double beta, double *y, const int incy)
{
    dgemv_calls++;
    __real_cblas_dgemv(order, ta, m, n, alpha, a, lda, x, incx, beta, y,
                       incy);
}

/* cblas_dgemv calls of one pass over n rows with the gradient, plain and
 * gathered (the rows in order). */
static long dgemv_calls_of(size_t L, const size_t *units, size_t n)
{
    gsl_rng *r = rng_new(7);
    double *theta, *Z, *t;
    size_t nw = random_problem(r, L, units, 0, n, &theta, &Z, &t);
    double *g = malloc(nw * sizeof *g);
    uint32_t *idx = malloc(n * sizeof *idx);
    assert_non_null(g);
    assert_non_null(idx);
    for (size_t i = 0; i < n; i++)
        idx[i] = (uint32_t)i;
    network_work *w = network_work_alloc(L, units, 300);
    assert_non_null(w);
    dgemv_calls = 0;
    network_loss_grad(L, units, 0, theta, Z, t, n, 0, g, NULL, w);
    network_loss_grad_rows(L, units, 0, theta, Z, t, idx, n, 0, g, NULL, w);
    long calls = dgemv_calls;
    network_work_free(w);
    free(theta);
    free(Z);
    free(t);
    free(g);
    free(idx);
    gsl_rng_free(r);
    return calls;
}

/* The fused kernel serves one hidden layer of 8, 16, 24 or 32 units (the
 * widths methods.md names), whatever the inputs; any other shape runs
 * through the general layers. */
static void test_network_fused_kernel_serves_its_shapes(void **state)
{
    (void)state;
    if (__real_cblas_dgemv == NULL)
        skip();
    const size_t fused[][3] = { { 3, 8, 1 }, { 20, 16, 1 }, { 5, 24, 1 },
                                { 9, 32, 1 }, { 0, 8, 1 } };
    const size_t general[][3] = { { 3, 4, 1 }, { 20, 12, 1 }, { 3, 40, 1 },
                                  { 3, 7, 1 } };
    const size_t deep[4] = { 3, 8, 8, 1 };
    for (size_t s = 0; s < sizeof fused / sizeof fused[0]; s++)
        if (dgemv_calls_of(2, fused[s], 700) != 0)
            fail_msg("%zu inputs, %zu units: not the fused kernel",
                     fused[s][0], fused[s][1]);
    for (size_t s = 0; s < sizeof general / sizeof general[0]; s++)
        if (dgemv_calls_of(2, general[s], 700) == 0)
            fail_msg("%zu inputs, %zu units: not the general layers",
                     general[s][0], general[s][1]);
    assert_true(dgemv_calls_of(3, deep, 700) > 0);
}

/* ------------------------------------------------------------ learning */

/* XOR-like classes: y = 1 when x1 x2 > 0, x uniform on [-1, 1]^2. No
 * linear boundary separates them better than chance does (Minsky & Papert,
 * Perceptrons, 1969, the XOR argument), which logistic_fit confirms. */
static void xor_rows(gsl_rng *r, size_t n, long double *X, double *y)
{
    for (size_t i = 0; i < n; i++) {
        double a = 2 * gsl_rng_uniform(r) - 1, b = 2 * gsl_rng_uniform(r) - 1;
        X[i * 3] = 1;
        X[i * 3 + 1] = a;
        X[i * 3 + 2] = b;
        y[i] = a * b > 0;
    }
}

static void test_network_learns_xor(void **state)
{
    (void)state;
    enum { N = 800, T = 2000 };
    static long double X[N * 3], Xt[T * 3];
    static double y[N], yt[T];
    gsl_rng *r = rng_new(4242);
    xor_rows(r, N, X, y);
    xor_rows(r, T, Xt, yt);
    network_options o;
    network_options_init(&o);
    o.classify = 1;
    network_model *m = NULL;
    rf_error e = {0};
    assert_int_equal(network_fit(X, y, N, 3, &o, &m, &e), RF_OK);
    assert_int_equal(m->solver, NETWORK_LBFGS);
    assert_int_equal(m->units[0], 2);   /* the intercept column skipped */
    size_t right = 0;
    for (size_t i = 0; i < T; i++)
        right += (network_predict(m, Xt + i * 3) >= 0.5) == (yt[i] == 1);
    print_message("xor: network accuracy %.4f on %d new rows, %ld epochs\n",
                  (double)right / T, T, m->epochs);
    assert_true(right > 0.95 * T);

    logistic_model *lg = NULL;
    assert_int_equal(logistic_fit(X, y, N, 3, 1, 0.95, 0, &lg, &e), RF_OK);
    size_t lright = 0;
    for (size_t i = 0; i < T; i++)
        lright += (logistic_predict(lg, Xt + i * 3) >= 0.5) == (yt[i] == 1);
    print_message("xor: logistic accuracy %.4f\n", (double)lright / T);
    assert_true(lright < 0.7 * T);
    logistic_free(lg);
    network_free(m);
    gsl_rng_free(r);
}

/* Invented sales in three fictional districts where the price per square
 * metre differs by district (2.1, 3.4 and 4.8 thousand), plus noise of
 * 12 thousand: price = area * rate[district] + noise. A linear model with
 * area and district indicators cannot put the interaction in. Columns:
 * intercept, area, district B, district C. */
#define INT_P 4
static void interaction_rows(gsl_rng *r, size_t n, long double *X,
                             double *y)
{
    static const double rate[3] = { 2.1, 3.4, 4.8 };
    for (size_t i = 0; i < n; i++) {
        double area = 50 + 150 * gsl_rng_uniform(r);
        size_t d = gsl_rng_uniform_int(r, 3);
        X[i * INT_P] = 1;
        X[i * INT_P + 1] = area;
        X[i * INT_P + 2] = d == 1;
        X[i * INT_P + 3] = d == 2;
        y[i] = area * rate[d] + gsl_ran_gaussian(r, 12.0);
    }
}

static void test_network_beats_linear_on_interaction(void **state)
{
    (void)state;
    enum { N = 1500, T = 3000 };
    static long double X[N * INT_P], Xt[T * INT_P], yl[N];
    static double y[N], yt[T];
    gsl_rng *r = rng_new(777);
    interaction_rows(r, N, X, y);
    interaction_rows(r, T, Xt, yt);
    for (size_t i = 0; i < N; i++)
        yl[i] = y[i];
    network_options o;
    network_options_init(&o);
    network_model *m = NULL;
    rf_error e = {0};
    assert_int_equal(network_fit(X, y, N, INT_P, &o, &m, &e), RF_OK);
    linear_model *lm = NULL;
    assert_int_equal(linear_fit(X, yl, N, INT_P, 1, 0.95, &lm, &e), RF_OK);
    long double sn = 0, sl = 0;
    for (size_t i = 0; i < T; i++) {
        double est, lo, hi;
        linear_predict(lm, Xt + i * INT_P, &est, &lo, &hi);
        double en = network_predict(m, Xt + i * INT_P) - yt[i];
        sn += en * en;
        sl += (est - yt[i]) * (est - yt[i]);
    }
    double rn = sqrt((double)(sn / T)), rl = sqrt((double)(sl / T));
    print_message("interaction: held-out RMSE network %.3f, linear %.3f "
                  "(noise sd 12), %ld epochs\n", rn, rl, m->epochs);
    /* the margin: the network's error at most half the linear fit's, and
     * within 25% of the noise it cannot remove */
    assert_true(rn < 0.5 * rl);
    assert_true(rn < 1.25 * 12.0);
    linear_free(lm);
    network_free(m);
    gsl_rng_free(r);
}

/* ------------------------------------------------------------ solvers */

/* A smooth surface with no noise: y = sin(2 x1) + x2^2 / 2 - x1 x3 / 3,
 * x normal. Columns: intercept, x1, x2, x3, and a constant 7 (skipped). */
#define SM_P 5
static void smooth_rows(gsl_rng *r, size_t n, long double *X, double *y,
                        double noise)
{
    for (size_t i = 0; i < n; i++) {
        double a = gsl_ran_gaussian(r, 1.0), b = gsl_ran_gaussian(r, 1.0);
        double c = gsl_ran_gaussian(r, 1.0);
        X[i * SM_P] = 1;
        X[i * SM_P + 1] = a;
        X[i * SM_P + 2] = b;
        X[i * SM_P + 3] = c;
        X[i * SM_P + 4] = 7;
        y[i] = sin(2 * a) + b * b / 2 - a * c / 3
               + (noise > 0 ? gsl_ran_gaussian(r, noise) : 0);
    }
}

static double variance(const double *y, size_t n)
{
    long double s = 0, ss = 0;
    for (size_t i = 0; i < n; i++)
        s += y[i];
    for (size_t i = 0; i < n; i++)
        ss += (y[i] - s / n) * (y[i] - s / n);
    return (double)(ss / n);
}

static void test_network_both_solvers_fit_a_smooth_surface(void **state)
{
    (void)state;
    enum { N = 2000 };
    static long double X[N * SM_P];
    static double y[N];
    gsl_rng *r = rng_new(99);
    smooth_rows(r, N, X, y, 0);
    double var = variance(y, N);
    for (int s = 0; s < 2; s++) {
        network_options o;
        network_options_init(&o);
        o.hidden[0] = 16;
        o.solver = s ? NETWORK_ADAM : NETWORK_LBFGS;
        o.holdout = 0;
        if (s) {
            o.epochs = 400;
            o.rate = 0.01;
        }
        network_model *m = NULL;
        rf_error e = {0};
        assert_int_equal(network_fit(X, y, N, SM_P, &o, &m, &e), RF_OK);
        assert_int_equal(m->solver, o.solver);
        assert_int_equal(m->units[0], 3);   /* intercept and 7 skipped */
        assert_int_equal(m->col[0], 1);
        assert_int_equal(m->col[2], 3);
        assert_true(isnan(m->valid_loss));
        /* the reported loss is the mean squared error of the estimates */
        long double se = 0;
        for (size_t i = 0; i < N; i++) {
            double d = network_predict(m, X + i * SM_P) - y[i];
            se += d * d;
        }
        assert_close(m->train_loss, (double)(se / N), 1e-9, 0);
        print_message("smooth, %s: training MSE / variance %.3g after %ld "
                      "epochs (%s)\n", network_solver_str(m->solver),
                      m->train_loss / var, m->epochs,
                      network_stop_str(m->stop));
        /* under 0.2% (L-BFGS) and 1% (Adam) of the variance unexplained */
        assert_true(m->train_loss < (s ? 1e-2 : 2e-3) * var);
        network_free(m);
    }
    gsl_rng_free(r);
}

static void test_network_is_deterministic(void **state)
{
    (void)state;
    enum { N = 300 };
    static long double X[N * SM_P];
    static double y[N];
    gsl_rng *r = rng_new(5);
    smooth_rows(r, N, X, y, 0.1);
    for (int s = 0; s < 2; s++) {
        network_options o;
        network_options_init(&o);
        o.solver = s ? NETWORK_ADAM : NETWORK_LBFGS;
        o.epochs = 50;
        o.seed = 2024;
        network_model *a = NULL, *b = NULL, *c = NULL;
        rf_error e = {0};
        assert_int_equal(network_fit(X, y, N, SM_P, &o, &a, &e), RF_OK);
        assert_int_equal(network_fit(X, y, N, SM_P, &o, &b, &e), RF_OK);
        o.seed = 2025;
        assert_int_equal(network_fit(X, y, N, SM_P, &o, &c, &e), RF_OK);
        assert_int_equal(a->n_weights, b->n_weights);
        assert_memory_equal(a->theta, b->theta,
                            a->n_weights * sizeof *a->theta);
        assert_memory_equal(a->holdout, b->holdout,
                            a->n_holdout * sizeof *a->holdout);
        assert_true(memcmp(a->theta, c->theta,
                           a->n_weights * sizeof *a->theta) != 0);
        assert_true(memcmp(a->holdout, c->holdout,
                           a->n_holdout * sizeof *a->holdout) != 0);
        network_free(a);
        network_free(b);
        network_free(c);
    }
    gsl_rng_free(r);
}

static void test_network_restarts_keep_the_best_held_out_loss(void **state)
{
    (void)state;
    enum { N = 400 };
    static long double X[N * SM_P];
    static double y[N];
    gsl_rng *r = rng_new(6);
    smooth_rows(r, N, X, y, 0.2);
    network_options o;
    network_options_init(&o);
    o.hidden[0] = 4;
    o.epochs = 40;   /* short runs, so the starts end apart */
    network_model *one = NULL, *four = NULL;
    rf_error e = {0};
    assert_int_equal(network_fit(X, y, N, SM_P, &o, &one, &e), RF_OK);
    o.restarts = 4;
    assert_int_equal(network_fit(X, y, N, SM_P, &o, &four, &e), RF_OK);
    assert_int_equal(four->n_holdout, 40);
    /* restart 0 is the single fit */
    assert_true(four->restart_loss[0] == one->valid_loss);
    double lo = INFINITY, hi = -INFINITY;
    size_t arg = 0;
    for (size_t k = 0; k < 4; k++) {
        if (four->restart_loss[k] < lo) {
            lo = four->restart_loss[k];
            arg = k;
        }
        hi = fmax(hi, four->restart_loss[k]);
    }
    print_message("restarts: held-out MSE %.5g .. %.5g, kept %zu\n", lo, hi,
                  four->restart_best);
    assert_true(hi > lo);
    assert_int_equal(four->restart_best, arg);
    assert_true(four->valid_loss == lo);
    /* and the kept weights have that loss on the held-out rows */
    long double se = 0;
    for (size_t k = 0; k < four->n_holdout; k++) {
        size_t i = four->holdout[k];
        double d = network_predict(four, X + i * SM_P) - y[i];
        se += d * d;
    }
    assert_close(four->valid_loss, (double)(se / four->n_holdout), 1e-9, 0);
    network_free(one);
    network_free(four);
    gsl_rng_free(r);
}

/* 80 rows of pure noise on six inputs and 64 hidden units: the training
 * loss can keep falling while the held-out loss rises. */
static void test_network_stops_early_when_overfitting(void **state)
{
    (void)state;
    enum { N = 80, P = 7 };
    static long double X[N * P];
    static double y[N];
    gsl_rng *r = rng_new(13);
    for (size_t i = 0; i < N; i++) {
        X[i * P] = 1;
        for (size_t j = 1; j < P; j++)
            X[i * P + j] = gsl_ran_gaussian(r, 1.0);
        y[i] = gsl_ran_gaussian(r, 1.0);
    }
    for (int s = 0; s < 2; s++) {
        network_options o;
        network_options_init(&o);
        o.hidden[0] = 64;
        o.solver = s ? NETWORK_ADAM : NETWORK_LBFGS;
        o.epochs = 1000;
        if (s)
            o.rate = 0.01;
        network_model *m = NULL;
        rf_error e = {0};
        assert_int_equal(network_fit(X, y, N, P, &o, &m, &e), RF_OK);
        print_message("noise, %s: %s after %ld of 1000 epochs, training "
                      "%.4g, held-out %.4g\n", network_solver_str(m->solver),
                      network_stop_str(m->stop), m->epochs, m->train_loss,
                      m->valid_loss);
        assert_int_equal(m->stop, NETWORK_EARLY_STOP);
        assert_true(m->epochs < 1000);
        network_free(m);
    }
    gsl_rng_free(r);
}

typedef struct counter { long calls, last; int ordered; } counter;

static void count_epochs(void *ctx, long epoch, double train, double valid)
{
    counter *c = ctx;
    c->ordered &= epoch == c->last + 1 && isfinite(train) && isfinite(valid);
    c->last = epoch;
    c->calls++;
}

static void test_network_respects_the_epoch_cap(void **state)
{
    (void)state;
    enum { N = 500 };
    static long double X[N * SM_P];
    static double y[N];
    gsl_rng *r = rng_new(8);
    smooth_rows(r, N, X, y, 0.05);
    for (int s = 0; s < 2; s++) {
        counter c = { 0, 0, 1 };
        network_options o;
        network_options_init(&o);
        o.solver = s ? NETWORK_ADAM : NETWORK_LBFGS;
        o.epochs = 3;
        o.progress = count_epochs;
        o.progress_ctx = &c;
        network_model *m = NULL;
        rf_error e = {0};
        assert_int_equal(network_fit(X, y, N, SM_P, &o, &m, &e), RF_OK);
        assert_int_equal(m->epochs, 3);
        assert_int_equal(m->epochs_cap, 3);
        assert_int_equal(m->stop, NETWORK_EPOCHS);
        assert_int_equal(c.calls, 3);
        assert_true(c.ordered);
        network_free(m);
    }
    gsl_rng_free(r);
}

static void test_network_chooses_the_solver_by_size(void **state)
{
    (void)state;
    /* 177 weights on 20 inputs (network.h): L-BFGS up to 94,786
     * training rows; the rule is read off the model, not run at size */
    enum { N = 1000, P = 21 };
    static long double X[N * P];
    static double y[N];
    gsl_rng *r = rng_new(10);
    for (size_t i = 0; i < N * P; i++)
        X[i] = i % P == 0 ? 1 : gsl_ran_gaussian(r, 1.0);
    for (size_t i = 0; i < N; i++)
        y[i] = gsl_ran_gaussian(r, 1.0);
    network_options o;
    network_options_init(&o);
    o.epochs = 1;
    network_model *m = NULL;
    rf_error e = {0};
    assert_int_equal(network_fit(X, y, N, P, &o, &m, &e), RF_OK);
    assert_int_equal(network_weights(m), 177);
    assert_int_equal(m->solver, NETWORK_LBFGS);
    assert_int_equal(m->epochs_cap, 1);
    network_free(m);
    /* 1000 units: 20 x 1000 + 1000 + 1000 + 1 = 22,001 weights x 900
     * training rows is past the budget of 2^24 */
    o.hidden[0] = 1000;
    assert_int_equal(network_fit(X, y, N, P, &o, &m, &e), RF_OK);
    assert_int_equal(network_weights(m), 22001);
    assert_true(900.0 * 22001 > (double)NETWORK_LBFGS_BUDGET);
    assert_int_equal(m->solver, NETWORK_ADAM);
    network_free(m);
    gsl_rng_free(r);
}

/* n rows of smooth_rows drawn with seed, in new arrays the caller frees:
 * the larger tables of the tests below. */
static void smooth_data(size_t n, unsigned long seed, double noise,
                        long double **X, double **y)
{
    *X = malloc(n * SM_P * sizeof **X);
    *y = malloc(n * sizeof **y);
    assert_non_null(*X);
    assert_non_null(*y);
    gsl_rng *r = rng_new(seed);
    smooth_rows(r, n, *X, *y, noise);
    gsl_rng_free(r);
}

/* The weights do not depend on the threads (network.h, NETWORK_LANES):
 * one, two and four threads give the same bits for both solvers, on rows
 * enough for several lanes a pass (L-BFGS: 3,000 rows, 4 lanes) and a
 * batch (Adam: 57,000 rows, 51,300 training rows, batches of about 1,024
 * in 2 lanes). */
static void test_network_threads_do_not_change_the_weights(void **state)
{
    (void)state;
    enum { N = 57000 };
    long double *X;
    double *y;
    smooth_data(N, 12, 0.1, &X, &y);
    for (int s = 0; s < 2; s++) {
        size_t n = s ? N : 3000;
        network_options o;
        network_options_init(&o);
        o.solver = s ? NETWORK_ADAM : NETWORK_LBFGS;
        o.epochs = s ? 2 : 30;
        o.seed = 77;
        network_model *m[3] = { NULL, NULL, NULL };
        const size_t threads[3] = { 1, 2, 4 };
        for (int k = 0; k < 3; k++) {
            rf_error e = {0};
            o.threads = threads[k];
            assert_int_equal(network_fit(X, y, n, SM_P, &o, &m[k], &e),
                             RF_OK);
        }
        if (s)
            assert_int_equal(m[0]->batch, 1024);
        for (int k = 1; k < 3; k++) {
            assert_int_equal(m[k]->epochs, m[0]->epochs);
            assert_memory_equal(m[k]->theta, m[0]->theta,
                                m[0]->n_weights * sizeof *m[0]->theta);
        }
        for (int k = 0; k < 3; k++)
            network_free(m[k]);
    }
    free(X);
    free(y);
}

/* Wide layers, whose products OpenBLAS would split among threads of its
 * own, and L-BFGS's dot products over more than 10,000 weights: still the
 * same bits with one thread or two (network.c runs OpenBLAS on the
 * calling thread throughout a fit). Adam: 3,000 rows x 20 inputs, 64
 * units; L-BFGS: 1,200 rows x 25 inputs, 500 units (13,501 weights). */
static void test_network_threads_do_not_change_wide_layers(void **state)
{
    (void)state;
    for (int s = 0; s < 2; s++) {
        const size_t n = s ? 1200 : 3000, q = s ? 25 : 20, p = q + 1;
        long double *X = malloc(n * p * sizeof *X);
        double *y = malloc(n * sizeof *y);
        assert_non_null(X);
        assert_non_null(y);
        gsl_rng *r = rng_new(31 + (unsigned long)s);
        for (size_t i = 0; i < n; i++) {
            double z = 0;
            X[i * p] = 1;
            for (size_t j = 1; j < p; j++) {
                X[i * p + j] = gsl_ran_gaussian(r, 1.0);
                z += sin((double)j * (double)X[i * p + j]) / (double)j;
            }
            y[i] = z + gsl_ran_gaussian(r, 0.2);
        }
        gsl_rng_free(r);
        network_options o;
        network_options_init(&o);
        o.solver = s ? NETWORK_LBFGS : NETWORK_ADAM;
        o.hidden[0] = s ? 500 : 64;
        o.epochs = 3;
        network_model *m[2] = { NULL, NULL };
        for (int k = 0; k < 2; k++) {
            rf_error e = {0};
            o.threads = (size_t)k + 1;
            assert_int_equal(network_fit(X, y, n, p, &o, &m[k], &e), RF_OK);
        }
        assert_int_equal(m[0]->n_weights, s ? 13501 : 1409);
        assert_memory_equal(m[1]->theta, m[0]->theta,
                            m[0]->n_weights * sizeof *m[0]->theta);
        network_free(m[0]);
        network_free(m[1]);
        free(X);
        free(y);
    }
}

typedef struct losses { long n; double train[8]; } losses;

static void keep_losses(void *ctx, long epoch, double train, double valid)
{
    (void)valid;
    losses *l = ctx;
    if (epoch >= 1 && epoch <= 8)
        l->train[epoch - 1] = train;
    l->n = epoch;
}

/* Adam deals the training rows into batches afresh every epoch, each row
 * once: with a step too small to move any weight (rate 1e-300), an
 * epoch's mean training loss, summed batch by batch, is the loss of one
 * full pass at the start weights. A row dropped or dealt twice among the
 * 60,000 would move it by about 1e-5 of itself; summation order, 1e-15. */
static void test_network_adam_uses_every_row_once_an_epoch(void **state)
{
    (void)state;
    enum { N = 60000 };
    long double *X;
    double *y;
    smooth_data(N, 13, 0.3, &X, &y);
    for (int classify = 0; classify <= 1; classify++) {
        if (classify)
            for (size_t i = 0; i < N; i++)
                y[i] = y[i] > 0;
        network_options o;
        network_options_init(&o);
        o.classify = classify;
        o.solver = NETWORK_ADAM;
        o.holdout = 0;
        o.epochs = 3;
        o.rate = 1e-300;
        losses l = { 0, { 0 } };
        o.progress = keep_losses;
        o.progress_ctx = &l;
        network_model *m = NULL;
        rf_error e = {0};
        assert_int_equal(network_fit(X, y, N, SM_P, &o, &m, &e), RF_OK);
        assert_int_equal(l.n, 3);
        assert_int_equal(m->batch, 1024);
        for (int k = 0; k < 3; k++)
            assert_close(l.train[k], m->train_loss, 1e-12, 0);
        network_free(m);
    }
    free(X);
    free(y);
}

/* One Adam epoch on 60,000 rows is about 59 batches of 1,024, so about
 * 59 steps, which take the training error from the start weights' (about
 * 2.5 times the target's variance here) to below the variance (measured:
 * 0.76 of it). A deal that put every row in one batch, one step an
 * epoch, leaves it at 2.5 (measured by making it so). */
static void test_network_adam_steps_many_times_an_epoch(void **state)
{
    (void)state;
    enum { N = 60000 };
    long double *X;
    double *y;
    smooth_data(N, 14, 0.1, &X, &y);
    network_options o;
    network_options_init(&o);
    o.solver = NETWORK_ADAM;
    o.holdout = 0;
    o.epochs = 1;
    o.rate = 0.01;
    network_model *m = NULL;
    rf_error e = {0};
    assert_int_equal(network_fit(X, y, N, SM_P, &o, &m, &e), RF_OK);
    double ratio = m->train_loss / variance(y, N);
    print_message("adam, one epoch: training MSE / variance %.4g\n", ratio);
    assert_true(ratio < 1);
    network_free(m);
    free(X);
    free(y);
}

/* From 4 MiB of standardized rows network.c places them on huge pages
 * (rows_alloc: an aligned part of a larger block): a fit over 9.6 MB
 * (60,000 rows x 20 inputs; 54,000 trained on, in Adam batches of 1,024
 * rows, two lanes each) runs, learns, and gives the same weights on one
 * thread and two; under the sanitizers (make check SANITIZE=1) any read
 * or write past the block, or a free of the wrong address, fails it. */
static void test_network_fits_rows_on_huge_pages(void **state)
{
    (void)state;
    enum { N = 60000, P = 21 };
    long double *X = malloc((size_t)N * P * sizeof *X);
    double *y = malloc(N * sizeof *y);
    assert_non_null(X);
    assert_non_null(y);
    gsl_rng *r = rng_new(91);
    for (size_t i = 0; i < N; i++) {
        X[i * P] = 1;
        for (size_t k = 1; k < P; k++)
            X[i * P + k] = gsl_ran_gaussian(r, 1.0);
        y[i] = sin(2 * (double)X[i * P + 1])
               + (double)(X[i * P + 2] * X[i * P + 20]) / 2
               + gsl_ran_gaussian(r, 0.1);
    }
    network_model *m[2] = { NULL, NULL };
    for (int k = 0; k < 2; k++) {
        network_options o;
        network_options_init(&o);
        o.solver = NETWORK_ADAM;
        o.epochs = 40;
        o.seed = 5;
        o.threads = (size_t)k + 1;
        rf_error e = {0};
        assert_int_equal(network_fit(X, y, N, P, &o, &m[k], &e), RF_OK);
    }
    assert_int_equal(m[0]->batch, 1024);   /* so two lanes a batch */
    /* y's variance is about 0.77 (sin 2 x1 about 0.5, the product 0.25)
     * and the inputs' best linear fit leaves about 0.69 of it (sin 2 x1's
     * slope on x1 is 2 e^-2); 40 epochs leave less than a quarter */
    assert_true(m[0]->train_loss < 0.25 * variance(y, N));
    assert_memory_equal(m[1]->theta, m[0]->theta,
                        m[0]->n_weights * sizeof *m[0]->theta);
    network_free(m[0]);
    network_free(m[1]);
    gsl_rng_free(r);
    free(X);
    free(y);
}

/* network.h: NETWORK_BATCH rows, doubled while an epoch keeps at least
 * NETWORK_BATCH_STEPS batches, at most NETWORK_BATCH_MAX. */
static void test_network_batch_grows_with_the_rows(void **state)
{
    (void)state;
    assert_int_equal(network_batch(1), 128);
    assert_int_equal(network_batch(12799), 128);
    assert_int_equal(network_batch(12800), 256);
    assert_int_equal(network_batch(25600), 512);
    assert_int_equal(network_batch(51199), 512);
    assert_int_equal(network_batch(51200), 1024);
    assert_int_equal(network_batch(1000000000), 1024);
}

/* ------------------------------------------------------------ importance */

/* y = 3 x1 + x2 / 2 + (district C: 2) + noise; x3 does nothing. Columns:
 * intercept, x1, x2, x3, district B, district C. */
static void test_network_importance_ranks_the_inputs(void **state)
{
    (void)state;
    enum { N = 1500, P = 6 };
    static long double X[N * P];
    static double y[N];
    gsl_rng *r = rng_new(21);
    for (size_t i = 0; i < N; i++) {
        size_t d = gsl_rng_uniform_int(r, 3);
        X[i * P] = 1;
        for (size_t j = 1; j <= 3; j++)
            X[i * P + j] = gsl_ran_gaussian(r, 1.0);
        X[i * P + 4] = d == 1;
        X[i * P + 5] = d == 2;
        y[i] = 3 * (double)X[i * P + 1] + (double)X[i * P + 2] / 2
               + (d == 2 ? 2 : 0) + gsl_ran_gaussian(r, 0.3);
    }
    network_options o;
    network_options_init(&o);
    network_model *m = NULL;
    rf_error e = {0};
    assert_int_equal(network_fit(X, y, N, P, &o, &m, &e), RF_OK);
    const size_t first[5] = { 0, 1, 2, 3, 4 }, len[5] = { 1, 1, 1, 1, 2 };
    double imp[5], again[5];
    assert_int_equal(network_importance(m, X, y, N, first, len, 5, 3, imp,
                                        &e), RF_OK);
    assert_int_equal(network_importance(m, X, y, N, first, len, 5, 3, again,
                                        &e), RF_OK);
    assert_memory_equal(imp, again, sizeof imp);
    print_message("importance: intercept %.4g, x1 %.4g, x2 %.4g, x3 %.4g, "
                  "district %.4g\n", imp[0], imp[1], imp[2], imp[3], imp[4]);
    /* shuffling x1 (variance 9 explained) adds about 2 x 9 to the MSE,
     * x2 about 2 x 0.25, the district about 2 x 0.89 (common practice:
     * a shuffled input adds twice its explained variance); x3 adds noise */
    assert_true(imp[0] == 0);
    assert_in_range((long)(imp[1] * 10), 120, 240);
    assert_true(imp[1] > imp[4] && imp[4] > imp[2] && imp[2] > imp[3]);
    assert_true(fabs(imp[3]) < 0.05);
    /* errors: wrong row count, a group past the columns */
    assert_int_equal(network_importance(m, X, y, N - 1, first, len, 5, 3,
                                        imp, &e), RF_EINPUT);
    const size_t bad_first[1] = { 5 }, bad_len[1] = { 2 };
    assert_int_equal(network_importance(m, X, y, N, bad_first, bad_len, 1, 3,
                                        imp, &e), RF_EINPUT);
    network_free(m);
    gsl_rng_free(r);
}

/* ------------------------------------------------------------ errors */

static void test_network_rejects_bad_input(void **state)
{
    (void)state;
    enum { N = 30 };
    long double X[N * SM_P];
    double y[N];
    gsl_rng *r = rng_new(3);
    smooth_rows(r, N, X, y, 0.1);
    network_options o;
    network_model *m = (network_model *)&o;
    rf_error e = {0};
#define REJECT(call) do { \
        m = (network_model *)&o; \
        memset(&e, 0, sizeof e); \
        assert_int_equal((call), RF_EINPUT); \
        assert_null(m); \
        assert_true(e.message[0] != '\0'); \
    } while (0)

    network_options_init(&o);
    o.hidden[0] = 0;
    REJECT(network_fit(X, y, N, SM_P, &o, &m, &e));
    o.hidden[0] = NETWORK_UNITS_MAX + 1;
    REJECT(network_fit(X, y, N, SM_P, &o, &m, &e));
    network_options_init(&o);
    o.n_hidden = 0;
    REJECT(network_fit(X, y, N, SM_P, &o, &m, &e));
    o.n_hidden = NETWORK_HIDDEN_MAX + 1;
    REJECT(network_fit(X, y, N, SM_P, &o, &m, &e));
    network_options_init(&o);
    o.restarts = 0;
    REJECT(network_fit(X, y, N, SM_P, &o, &m, &e));
    network_options_init(&o);
    o.ridge = -1;
    REJECT(network_fit(X, y, N, SM_P, &o, &m, &e));
    network_options_init(&o);
    o.rate = NAN;
    REJECT(network_fit(X, y, N, SM_P, &o, &m, &e));
    network_options_init(&o);
    o.epochs = -2;
    REJECT(network_fit(X, y, N, SM_P, &o, &m, &e));
    network_options_init(&o);
    o.holdout = 0.9;
    REJECT(network_fit(X, y, N, SM_P, &o, &m, &e));
    network_options_init(&o);
    REJECT(network_fit(X, y, 2, SM_P, &o, &m, &e));   /* 1 held, 1 left */

    long double keep = X[7 * SM_P + 2];
    X[7 * SM_P + 2] = INFINITY;
    REJECT(network_fit(X, y, N, SM_P, &o, &m, &e));
    assert_non_null(strstr(e.message, "row 8"));
    X[7 * SM_P + 2] = NAN;
    REJECT(network_fit(X, y, N, SM_P, &o, &m, &e));
    X[7 * SM_P + 2] = keep;
    double yk = y[4];
    y[4] = NAN;
    REJECT(network_fit(X, y, N, SM_P, &o, &m, &e));
    y[4] = yk;
    o.classify = 1;   /* y is not 0/1 */
    REJECT(network_fit(X, y, N, SM_P, &o, &m, &e));

    /* a rate so large the loss overflows: an error, not NaN weights */
    network_options_init(&o);
    o.solver = NETWORK_ADAM;
    o.rate = 1e300;
    REJECT(network_fit(X, y, N, SM_P, &o, &m, &e));
    assert_non_null(strstr(e.message, "non-finite"));
#undef REJECT
    /* the limits themselves are accepted */
    network_options_init(&o);
    o.n_hidden = NETWORK_HIDDEN_MAX;
    for (size_t l = 0; l < NETWORK_HIDDEN_MAX; l++)
        o.hidden[l] = 1 + l;
    o.holdout = 0.5;
    o.epochs = 2;
    m = NULL;
    assert_int_equal(network_fit(X, y, N, SM_P, &o, &m, &e), RF_OK);
    assert_int_equal(m->n_layers, NETWORK_HIDDEN_MAX + 1);
    assert_int_equal(m->n_holdout, 15);
    network_free(m);
    network_free(NULL);
    gsl_rng_free(r);
}

int main(void)
{
    gsl_set_error_handler_off();
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_network_gradient_matches_finite_differences),
        cmocka_unit_test(test_network_gradient_over_lanes),
        cmocka_unit_test(test_network_gradient_of_the_fused_layer),
        cmocka_unit_test(test_network_gathered_rows_equal_copied_rows),
        cmocka_unit_test(test_network_fused_kernel_serves_its_shapes),
        cmocka_unit_test(test_network_threads_do_not_change_the_weights),
        cmocka_unit_test(test_network_threads_do_not_change_wide_layers),
        cmocka_unit_test(test_network_adam_uses_every_row_once_an_epoch),
        cmocka_unit_test(test_network_adam_steps_many_times_an_epoch),
        cmocka_unit_test(test_network_batch_grows_with_the_rows),
        cmocka_unit_test(test_network_fits_rows_on_huge_pages),
        cmocka_unit_test(test_network_learns_xor),
        cmocka_unit_test(test_network_beats_linear_on_interaction),
        cmocka_unit_test(test_network_both_solvers_fit_a_smooth_surface),
        cmocka_unit_test(test_network_is_deterministic),
        cmocka_unit_test(test_network_restarts_keep_the_best_held_out_loss),
        cmocka_unit_test(test_network_stops_early_when_overfitting),
        cmocka_unit_test(test_network_respects_the_epoch_cap),
        cmocka_unit_test(test_network_chooses_the_solver_by_size),
        cmocka_unit_test(test_network_importance_ranks_the_inputs),
        cmocka_unit_test(test_network_rejects_bad_input),
    };
    return cmocka_run_group_tests_name("network", tests, NULL, NULL);
}
