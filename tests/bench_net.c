/*
 * bench_net.c: `make bench-net` (part of `make bench`): what an epoch of
 * the network costs, one hidden layer of 16 units on 100,000 generated
 * rows x 20 inputs, against the machine's cblas_dgemm rate measured in the
 * same run on square 1000 x 1000 products. Prints time per epoch, the
 * achieved rate of the network's useful arithmetic and its share of the
 * dgemm rate (goal: 30% or more). A benchmark, not a test: it checks
 * nothing but that each step succeeded.
 *
 * Counting: per training row and epoch, forward 2 q h + 2 h, backward
 * 2 q h (input weights) + 2 h (output weights) + 2 h (hidden deltas):
 * 4 q h + 6 h multiply-adds counted as two operations each, tanh and the
 * solver's own vector work not counted. Nothing is held out, so every
 * epoch is the same work and the epoch count is fixed. The time of an
 * epoch in one training run is the median over the epochs after the first
 * (the first also pays for first touches of memory; a median, because a
 * shared machine's pauses move a mean). Each solver trains three times,
 * the solvers in turn, and is judged by its fastest run, as the dgemm
 * rate is the best of five products: on a shared virtual machine a run
 * can fall into seconds when a processor runs at half speed, and the goal
 * is about what the code achieves, not about the neighbours (every run's
 * time is printed). The network trains first and the dgemm rate is
 * measured after it: OpenBLAS's own threads keep spinning for a while
 * after a threaded product and would compete with the network's.
 *
 * Options: `--solver adam|lbfgs` runs one solver alone (for perf record);
 * `--threads N` sets network_options.threads (default: the processors);
 * `--rows N`, `--epochs N`, `--runs N` (training runs of each solver).
 */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include <gsl/gsl_cblas.h>
#include <gsl/gsl_errno.h>
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>

#include "../engine/blascore.h"
#include "../engine/network.h"
#include "../engine/team.h"

/* OpenBLAS's own thread control (network.c says why it is declared here) */
void openblas_set_num_threads(int threads);

static double now(void)
{
    struct timespec t;
    clock_gettime(CLOCK_MONOTONIC, &t);
    return (double)t.tv_sec + t.tv_nsec * 1e-9;
}

/* The best of five 1000 x 1000 x 1000 products, in GFLOP/s. */
static double dgemm_rate(void)
{
    const int k = 1000;
    double *A = malloc((size_t)k * k * sizeof *A);
    double *B = malloc((size_t)k * k * sizeof *B);
    double *C = malloc((size_t)k * k * sizeof *C);
    if (!A || !B || !C)
        exit(3);
    for (size_t i = 0; i < (size_t)k * k; i++) {
        A[i] = 1.0 + (double)(i % 7) / 8;
        B[i] = 0.5 - (double)(i % 5) / 9;
    }
    double best = 1e30;
    for (int r = 0; r < 5; r++) {
        double t0 = now();
        cblas_dgemm(CblasRowMajor, CblasNoTrans, CblasNoTrans, k, k, k, 1.0,
                    A, k, B, k, 0.0, C, k);
        double t = now() - t0;
        if (t < best)
            best = t;
    }
    free(A);
    free(B);
    free(C);
    return 2.0 * k * k * (double)k / best / 1e9;
}

/* The rate of the network's own forward product on one thread, a lane's
 * block of 512 rows x 20 inputs times the 20 x 16 input weights, repeated
 * over 100,000 rows: the ceiling the small shapes allow, in GFLOP/s. */
static double dgemm_rate_small(size_t q, size_t h)
{
    const size_t rows = 512, reps = 100000 / 512;
    double *A = malloc(rows * q * sizeof *A), *B = malloc(q * h * sizeof *B);
    double *C = malloc(rows * h * sizeof *C);
    if (!A || !B || !C)
        exit(3);
    for (size_t i = 0; i < rows * q; i++)
        A[i] = 0.25 + (double)(i % 11) / 13;
    for (size_t i = 0; i < q * h; i++)
        B[i] = 0.75 - (double)(i % 3) / 7;
    double best = 1e30;
    for (int r = 0; r < 5; r++) {
        double t0 = now();
        for (size_t k = 0; k < reps; k++)
            cblas_dgemm(CblasRowMajor, CblasNoTrans, CblasTrans, (int)rows,
                        (int)h, (int)q, 1.0, A, (int)q, B, (int)q, 1.0, C,
                        (int)h);
        double t = now() - t0;
        if (t < best)
            best = t;
    }
    free(A);
    free(B);
    free(C);
    return 2.0 * (double)(rows * q * h * reps) / best / 1e9;
}

#define EPOCHS_MAX 10000

typedef struct clock_ctx {
    double last;
    long epochs;
    double took[EPOCHS_MAX];   /* took[e]: epoch e + 2 (e >= 0) */
} clock_ctx;

/* Times every epoch but the first (which also pays for first touches). */
static void tick(void *ctx, long epoch, double train, double valid)
{
    (void)train;
    (void)valid;
    clock_ctx *c = ctx;
    double t = now();
    if (epoch >= 2 && epoch - 2 < EPOCHS_MAX)
        c->took[epoch - 2] = t - c->last;
    c->last = t;
    c->epochs = epoch;
}

static int by_value(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

/* One training run of the network (lbfgs: that solver, else Adam) on the
 * bench's rows; prints it and returns its median epoch in seconds, or -1
 * when the fit failed. */
static double train(const long double *X, const double *y, size_t n,
                    size_t p, size_t h, int lbfgs, long epochs,
                    size_t threads)
{
    static clock_ctx c;   /* EPOCHS_MAX times: too large for the stack */
    memset(&c, 0, sizeof c);
    network_options o;
    network_options_init(&o);
    o.hidden[0] = h;
    o.solver = lbfgs ? NETWORK_LBFGS : NETWORK_ADAM;
    o.holdout = 0;
    o.epochs = epochs;
    o.threads = threads;
    o.progress = tick;
    o.progress_ctx = &c;
    network_model *m = NULL;
    rf_error err;
    memset(&err, 0, sizeof err);
    double t0 = now();
    if (network_fit(X, y, n, p, &o, &m, &err) != RF_OK) {
        fprintf(stderr, "bench-net: %s\n", err.message);
        return -1;
    }
    double total = now() - t0;
    /* Adam: one pass an epoch; L-BFGS: one pass per line-search trial,
     * nearly always one, so its epochs are a lower bound */
    long timed = c.epochs - 1 < EPOCHS_MAX ? c.epochs - 1 : EPOCHS_MAX;
    double per = total;
    if (timed > 0) {
        qsort(c.took, (size_t)timed, sizeof *c.took, by_value);
        per = timed % 2 ? c.took[timed / 2]
                        : (c.took[timed / 2 - 1] + c.took[timed / 2]) / 2;
    }
    printf("bench-net: %s, %zu rows x %zu inputs, %zu hidden units, %ld "
           "epochs in %.2f s: %.1f ms an epoch (median); training MSE "
           "%.4g\n", network_solver_str(m->solver), n, p - 1, h, m->epochs,
           total, per * 1e3, m->train_loss);
    network_free(m);
    return per;
}

int main(int argc, char **argv)
{
    size_t n = 100000, q = 20, h = 16;
    blascore_restart(argv);   /* the kernels rowfit itself would run */
    long epochs = 20, runs = 3;
    size_t threads_opt = 0;
    int first = 0, last = 1;   /* solvers: 0 Adam, 1 L-BFGS */
    for (int a = 1; a + 1 < argc; a += 2) {
        if (strcmp(argv[a], "--rows") == 0)
            n = strtoul(argv[a + 1], NULL, 10);
        else if (strcmp(argv[a], "--epochs") == 0)
            epochs = strtol(argv[a + 1], NULL, 10);
        else if (strcmp(argv[a], "--runs") == 0)
            runs = strtol(argv[a + 1], NULL, 10);
        else if (strcmp(argv[a], "--threads") == 0)
            threads_opt = strtoul(argv[a + 1], NULL, 10);
        else if (strcmp(argv[a], "--solver") == 0) {
            /* one solver alone, for a profile of it */
            first = last = strcmp(argv[a + 1], "lbfgs") == 0;
        }
    }
    gsl_set_error_handler_off();
    size_t p = q + 1;
    long double *X = malloc(n * p * sizeof *X);
    double *y = malloc(n * sizeof *y);
    if (!X || !y)
        return 3;
    /* invented rows: twenty normal inputs, a smooth target with noise */
    gsl_rng *r = gsl_rng_alloc(gsl_rng_mt19937);
    gsl_rng_set(r, 20261203);
    for (size_t i = 0; i < n; i++) {
        X[i * p] = 1;
        double s = 0;
        for (size_t j = 1; j < p; j++) {
            X[i * p + j] = gsl_ran_gaussian(r, 1.0);
            s += (double)X[i * p + j] * (0.2 + 0.05 * (double)j);
        }
        y[i] = tanh(s) + 0.3 * (double)X[i * p + 1] * (double)X[i * p + 2]
               + gsl_ran_gaussian(r, 0.1);
    }
    gsl_rng_free(r);

    if (runs < 1)
        runs = 1;
    double flops_row = 4.0 * (double)(q * h) + 6.0 * (double)h;
    double per_epoch[2] = { INFINITY, INFINITY };   /* the fastest run's */
    for (long run = 0; run < runs; run++) {
        printf("bench-net: training run %ld of %ld\n", run + 1, runs);
        for (int s = first; s <= last; s++) {
            double per = train(X, y, n, p, h, s, epochs, threads_opt);
            if (per < 0)
                return 1;
            if (per < per_epoch[s])
                per_epoch[s] = per;
        }
    }
    /* the dgemm rates after the training: OpenBLAS's threads spin for a
     * while after a threaded product and would compete with the
     * network's */
    const char *threads = getenv("OPENBLAS_NUM_THREADS");
    double peak = dgemm_rate();
    printf("bench-net: cblas_dgemm 1000^3: %.2f GFLOP/s "
           "(OpenBLAS's %s kernels, OPENBLAS_NUM_THREADS=%s)\n", peak,
           blascore_name(), threads ? threads : "unset");
    openblas_set_num_threads(1);
    printf("bench-net: cblas_dgemm 512 x %zu x %zu on one thread (a lane's "
           "forward product): %.2f GFLOP/s\n", q, h, dgemm_rate_small(q, h));
    if (threads_opt > 0)
        printf("bench-net: %zu processors usable; the network was given "
               "%zu threads (--threads)\n", team_cores(), threads_opt);
    else
        printf("bench-net: %zu processors usable; the network used one "
               "thread each, at most %d (NETWORK_LANES)\n", team_cores(),
               NETWORK_LANES);
    for (int s = first; s <= last; s++) {
        double rate = flops_row * (double)n / per_epoch[s] / 1e9;
        printf("bench-net: %s: %.1f ms an epoch (fastest run), %.2f GFLOP/s "
               "= %.0f%% of dgemm (goal 30%%: %s)\n", s ? "lbfgs" : "adam",
               per_epoch[s] * 1e3, rate, 100 * rate / peak,
               rate >= 0.3 * peak ? "met" : "NOT met");
    }
    free(X);
    free(y);
    return 0;
}
