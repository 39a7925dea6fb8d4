/*
 * bench_cv.c: `make bench` part: what 5-fold cross-validation of a linear
 * fit costs, against the plain fit, on generated rows (1,000,000 x 10
 * inputs by default). A benchmark, not a test: it prints timings and the
 * ratio the speed goal is stated in (cross-validated fit / plain fit,
 * goal under 3), and checks nothing but that each step succeeded.
 */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include <gsl/gsl_errno.h>
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>

#include "../engine/blascore.h"
#include "../engine/diagnose.h"
#include "../engine/linear.h"
#include "../engine/validate.h"

static double now(void)
{
    struct timespec t;
    clock_gettime(CLOCK_MONOTONIC, &t);
    return (double)t.tv_sec + t.tv_nsec * 1e-9;
}

int main(int argc, char **argv)
{
    size_t n = 1000000, inputs = 10, k = 5;
    blascore_restart(argv);   /* the kernels rowfit itself would run */
    for (int a = 1; a + 1 < argc; a += 2)
        if (strcmp(argv[a], "--rows") == 0)
            n = strtoul(argv[a + 1], NULL, 10);
    gsl_set_error_handler_off();
    size_t p = inputs + 1;
    long double *X = malloc(n * p * sizeof *X), *y = malloc(n * sizeof *y);
    size_t *fold = malloc(n * sizeof *fold);
    double *pred = malloc(n * sizeof *pred);
    if (!X || !y || !fold || !pred)
        return 3;
    /* invented rows: ten inputs of different scales, a known line, noise */
    gsl_rng *r = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(r, 20261202);
    for (size_t i = 0; i < n; i++) {
        long double e = 3.25L;
        X[i * p] = 1;
        for (size_t j = 1; j < p; j++) {
            X[i * p + j] = gsl_ran_gaussian(r, (double)j) + (double)j * 10;
            e += X[i * p + j] * (0.5L + 0.1L * j);
        }
        y[i] = e + gsl_ran_gaussian(r, 2.0);
    }
    gsl_rng_free(r);
    rf_error err;
    memset(&err, 0, sizeof err);
    linear_model *m = NULL;
    double t0 = now();
    if (linear_fit(X, y, n, p, 1, 0.95, &m, &err) != RF_OK) {
        fprintf(stderr, "bench_cv: %s\n", err.message);
        return 1;
    }
    double t_fit = now() - t0;
    t0 = now();
    size_t refits = 0;
    if (validate_folds(n, k, 1, NULL, fold, &err) != RF_OK
        || linear_cv(m, X, y, fold, k, pred, &refits, &err) != RF_OK) {
        fprintf(stderr, "bench_cv: %s\n", err.message);
        return 1;
    }
    double t_cv = now() - t0;
    t0 = now();
    diagnose_result *dg = NULL;
    if (diagnose_linear(m, X, &dg, &err) != RF_OK) {
        fprintf(stderr, "bench_cv: %s\n", err.message);
        return 1;
    }
    double t_diag = now() - t0;
    printf("bench cv: %zu rows x %zu inputs: fit %.2f s; 5-fold "
           "cross-validation %.2f s (%zu folds refitted); diagnostics "
           "%.2f s\n", n, inputs, t_fit, t_cv, refits, t_diag);
    printf("bench cv: fit with 5-fold cross-validation = %.2fx the plain "
           "fit (goal: under 3x)\n", (t_fit + t_cv) / t_fit);
    diagnose_free(dg);
    linear_free(m);
    free(X);
    free(y);
    free(fold);
    free(pred);
    return 0;
}
