/*
 * network.c: the multilayer perceptron of `model network` (see network.h
 * for the model, the objective and the rules). Backpropagation on blocks
 * of rows with the matrix products through CBLAS (OpenBLAS at link time);
 * L-BFGS with a backtracking Armijo line search for small data, Adam on
 * mini-batches for large data; early stopping, restarts and permutation
 * importance. Not a general neural-network library.
 */
#define _DEFAULT_SOURCE   /* madvise's MADV_HUGEPAGE (Linux) */
#include "network.h"

#include <assert.h>
#include <float.h>
#include <limits.h>
#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>
#include <sys/mman.h>

#include <gsl/gsl_cblas.h>
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>

#include "job.h"
#include "team.h"

/* OpenBLAS's own thread control, declared in its cblas.h, which cannot be
 * included beside GSL's gsl_cblas.h (the two define the same enums); the
 * program links OpenBLAS by name (Makefile). */
void openblas_set_num_threads(int threads);
int openblas_get_num_threads(void);

/* Sets OpenBLAS to run every product on the calling thread and returns
 * its thread count before, for openblas_set_num_threads to restore. A fit
 * and an importance run so: OpenBLAS's own threads would compete with the
 * team's inside the lanes' small products, and, one or several, they
 * would round wide products (and L-BFGS's long dot products) differently
 * from one thread, so the results would depend on the threads. */
static int blas_on_caller(void)
{
    int before = openblas_get_num_threads();
    openblas_set_num_threads(1);
    return before;
}

_Static_assert(NETWORK_HIDDEN_MAX == JOB_HIDDEN_MAX,
               "network.h and job.h disagree on the hidden layers");
_Static_assert(NETWORK_UNITS_MAX == JOB_UNITS_MAX,
               "network.h and job.h disagree on the units a layer");
_Static_assert(NETWORK_HIDDEN_DEFAULT == JOB_HIDDEN_DEFAULT,
               "network.h and job.h disagree on the default layer");

#define LAYERS_MAX (NETWORK_HIDDEN_MAX + 1)

/* Rows per block of a full pass: enough for cblas_dgemm to run near its
 * rate, few enough that the activations stay in cache for small nets. */
#define BLOCK_ROWS 512

/* L-BFGS line search (Nocedal & Wright, Numerical Optimization, 2nd ed.,
 * Algorithm 3.1 with the safeguarded quadratic interpolation of sec. 3.5):
 * sufficient-decrease constant c1, trial steps at most. */
#define ARMIJO_C1 1e-4
#define ARMIJO_TRIALS 60
/* L-BFGS convergence: a relative fall of the objective below FTOL in one
 * iteration, or a gradient below GTOL in every entry (common practice). */
#define LBFGS_FTOL 1e-12
#define LBFGS_GTOL 1e-9

/* Adam's moment decays and floor (Kingma & Ba, "Adam: a method for
 * stochastic optimization", ICLR 2015, Algorithm 1 defaults). */
#define ADAM_B1 0.9
#define ADAM_B2 0.999
#define ADAM_EPS 1e-8

/* ------------------------------------------------------------ names */

const char *network_stop_str(network_stop s)
{
    switch (s) {
    case NETWORK_CONVERGED:
        return "converged: the objective stopped falling";
    case NETWORK_EARLY_STOP:
        return "stopped early: the held-out loss stopped falling";
    case NETWORK_EPOCHS:
        return "not converged: the epoch cap was reached";
    }
    return "unknown";
}

const char *network_solver_str(network_solver s)
{
    switch (s) {
    case NETWORK_SOLVER_AUTO:
        return "auto";
    case NETWORK_LBFGS:
        return "lbfgs";
    case NETWORK_ADAM:
        return "adam";
    }
    return "unknown";
}

void network_options_init(network_options *o)
{
    memset(o, 0, sizeof *o);
    o->n_hidden = 1;
    o->hidden[0] = NETWORK_HIDDEN_DEFAULT;
    o->solver = NETWORK_SOLVER_AUTO;
    o->seed = 1;
    o->restarts = 1;
    o->holdout = NETWORK_HOLDOUT;
}

/* ------------------------------------------------------------ numerics */

/* log(1 + e^z) without overflow or loss for large |z|. */
static double softplus(double z)
{
    return z > 0 ? z + log1p(exp(-z)) : log1p(exp(z));
}

static double sigmoid(double z)
{
    if (z >= 0)
        return 1 / (1 + exp(-z));
    double e = exp(z);
    return e / (1 + e);
}

/* tanh of v[0..n-1] in place, for the hidden units: eight values at a
 * time in GCC's vector extensions, compiled for AVX-512, AVX2 and the
 * baseline instruction set and chosen when the program loads
 * (target_clones), so the loop runs in vector registers wherever they
 * exist. libm's tanh took half the time of an epoch in tests/bench_net.c,
 * a scalar version of this a third; this costs 1.4 ns a value (AVX-512)
 * against 6.7 (scalar) on the machine of `make bench-net`.
 * tanh |x| = e / (e + 2) with e = expm1(2 |x|) (the identity libm uses
 * too), expm1 by range reduction 2|x| = k ln 2 + r, |r| <= ln 2 / 2, and
 * e^r - 1 by its Taylor series to r^14 (remainder below r^15 / 15! < 1e-19
 * |r|; Muller, Elementary Functions, 3rd ed., ch. 11, for the range
 * reduction); 2^k is built in the exponent field. |x| >= 19.1 gives 1, as
 * tanh rounds to 1 there; NaN stays NaN. Largest error 4.5 units in the
 * last place (1.0e-15 relative) against tanhl on 2^21 points of [-20, 20]
 * and 2^21 from 2^-1074 to 2^6. Each clone performs the same
 * correctly rounded operations in the same order (ISO C mode: no fused
 * multiply-add contraction), so every clone gives the same bits. */
#define TANH_LANES 8
typedef double tanh_vd __attribute__((vector_size(TANH_LANES
                                                  * sizeof(double))));
typedef int64_t tanh_vi __attribute__((vector_size(TANH_LANES
                                                   * sizeof(double))));

/* *v = tanh of its eight values, as described above; inlined into each
 * clone of its callers (through a pointer: a vector argument by value
 * would draw GCC's warning on the AVX-512 calling convention). */
static inline __attribute__((always_inline)) void tanh_vec(tanh_vd *v)
{
    const tanh_vd x = *v;
    const double ln2_hi = 6.93147180369123816490e-01;  /* fdlibm's split */
    const double ln2_lo = 1.90821492927058770002e-10;
    const double shift = 6755399441055744.0;            /* 1.5 x 2^52 */
    const tanh_vi sign = (tanh_vi){ 0 } + INT64_MIN;
    const tanh_vd big = (tanh_vd){ 0 } + 19.1;
    tanh_vi xb = (tanh_vi)x;
    tanh_vd a = (tanh_vd)(xb & ~sign);
    tanh_vi over = a > big;
    a = (tanh_vd)(((tanh_vi)a & ~over) | ((tanh_vi)big & over));
    tanh_vd y = 2 * a;
    tanh_vd kd = (y * 1.4426950408889634 + shift) - shift;  /* round */
    tanh_vd r = (y - kd * ln2_hi) - kd * ln2_lo;
    /* e^r - 1 = r (1 + r/2! + ... + r^13/14!), in Estrin's scheme
     * (Knuth, TAOCP vol. 2, 3rd ed., sec. 4.6.4) for a short
     * dependency chain */
    tanh_vd r2 = r * r, r4 = r2 * r2, r8 = r4 * r4;
    tanh_vd c01 = 1.0 + r * (1.0 / 2), c23 = 1.0 / 6 + r * (1.0 / 24);
    tanh_vd c45 = 1.0 / 120 + r * (1.0 / 720);
    tanh_vd c67 = 1.0 / 5040 + r * (1.0 / 40320);
    tanh_vd c89 = 1.0 / 362880 + r * (1.0 / 3628800);
    tanh_vd cab = 1.0 / 39916800 + r * (1.0 / 479001600);
    tanh_vd ccd = 1.0 / 6227020800 + r * (1.0 / 87178291200);
    tanh_vd q = r * ((c01 + r2 * c23) + r4 * (c45 + r2 * c67)
                     + r8 * ((c89 + r2 * cab) + r4 * ccd));
    tanh_vd kb = kd + (shift + 1023);   /* k + 1023 in the low bits */
    tanh_vd two_k = (tanh_vd)((tanh_vi)kb << 52);
    tanh_vd e = two_k * q + (two_k - 1);      /* expm1(2a) */
    tanh_vd t = e / (e + 2);
    *v = (tanh_vd)((tanh_vi)t | (xb & sign));  /* tanh's sign is x's */
}

/* v[k] = tanh(v[k] + bias[k % period]) for k < n, or tanh(v[k]) when bias
 * is NULL; period is a multiple of TANH_LANES (so no vector straddles the
 * end of bias), or any value when bias is NULL. */
__attribute__((target_clones("avx512f", "avx2", "default")))
static void tanh_block(double *v, size_t n, const double *bias,
                       size_t period)
{
    size_t at = 0;   /* i % period */
    for (size_t i = 0; i < n; i += TANH_LANES) {
        /* the last, partial vector through a zeroed copy */
        size_t m = n - i < TANH_LANES ? n - i : TANH_LANES;
        tanh_vd x = { 0 };
        if (m == TANH_LANES)
            memcpy(&x, v + i, sizeof x);
        else
            memcpy(&x, v + i, m * sizeof *v);
        if (bias != NULL) {
            tanh_vd bv;
            memcpy(&bv, bias + at, sizeof bv);
            x += bv;
            at += TANH_LANES;
            if (at == period)
                at = 0;
        }
        tanh_vec(&x);
        if (m == TANH_LANES)
            memcpy(v + i, &x, sizeof x);
        else
            memcpy(v + i, &x, m * sizeof *v);
    }
}

/* Weights before layer l's in theta, and the total; units[] checked by the
 * caller so that nothing overflows (units <= NETWORK_UNITS_MAX, inputs
 * bounded by network_fit). */
static size_t layer_offset(const size_t *units, size_t l)
{
    size_t off = 0;
    for (size_t k = 0; k < l; k++)
        off += units[k + 1] * units[k] + units[k + 1];
    return off;
}

/* One lane of a pass (network.h, NETWORK_LANES): its own activations,
 * deltas and gradient, so that lanes on different threads never write the
 * same memory, nor the same cache line (its buffers from lane_malloc; a
 * line of padding after the one field a lane writes in the struct). */
typedef struct lane {
    double *act[LAYERS_MAX + 1];  /* act[l], l >= 1: rows x units[l];
                                     act[n_layers] holds the output unit's
                                     input z */
    double *delta[2];             /* rows x the widest layer */
    double *ones;                 /* rows ones: column sums by dgemv */
    double *grad;                 /* nw: the lane's summed gradient */
    double *wt;                   /* every W[l] transposed (units[l] x
                                     units[l+1]), layer after layer */
    double *tile;                 /* TANH_LANES rows of each hidden layer's
                                     biases, layer after layer */
    double *gz, *gt;              /* a block of gathered rows and targets */
    long double loss;             /* the lane's summed loss */
    char pad[64];
} lane;

/* Each lane builds its own copy of the weights (lane_weights) rather than
 * reading one shared copy: a shared copy, rewritten by one thread for
 * every Adam batch, would move between the processors' caches each time. */
struct network_work {
    size_t rows, n_layers, nw;
    lane lane[NETWORK_LANES];
    team *team;                   /* NULL: the lanes run one by one */
};

void network_work_free(network_work *w)
{
    if (w == NULL)
        return;
    for (size_t k = 0; k < NETWORK_LANES; k++) {
        lane *ln = &w->lane[k];
        for (size_t l = 0; l <= LAYERS_MAX; l++)
            free(ln->act[l]);
        free(ln->delta[0]);
        free(ln->delta[1]);
        free(ln->ones);
        free(ln->grad);
        free(ln->wt);
        free(ln->tile);
        free(ln->gz);
        free(ln->gt);
    }
    free(w);
}

/* malloc with two cache lines (64 bytes, x86-64 and ARM64) to spare after
 * the block, so that no two lanes' buffers share a line; NULL on no
 * memory. */
static void *lane_malloc(size_t bytes)
{
    return malloc(bytes + 128);
}

network_work *network_work_alloc(size_t n_layers, const size_t *units,
                                 size_t rows)
{
    if (n_layers == 0 || n_layers > LAYERS_MAX || rows == 0
        || units[n_layers] != 1)
        return NULL;
    network_work *w = calloc(1, sizeof *w);
    if (w == NULL)
        return NULL;
    w->rows = rows;
    w->n_layers = n_layers;
    w->nw = layer_offset(units, n_layers);
    size_t widest = 1, nwt = 0, hidden = 0;
    for (size_t l = 1; l <= n_layers; l++) {
        if (units[l] > widest)
            widest = units[l];
        nwt += units[l] * units[l - 1];
        if (l < n_layers)
            hidden += units[l];
    }
    for (size_t k = 0; k < NETWORK_LANES; k++) {
        lane *ln = &w->lane[k];
        ln->wt = lane_malloc((nwt > 0 ? nwt : 1) * sizeof(double));
        ln->tile = lane_malloc((hidden > 0 ? TANH_LANES * hidden : 1)
                               * sizeof(double));
        if (ln->wt == NULL || ln->tile == NULL)
            goto fail;
        for (size_t l = 1; l <= n_layers; l++) {
            ln->act[l] = lane_malloc(rows * units[l] * sizeof(double));
            if (ln->act[l] == NULL)
                goto fail;
        }
        ln->delta[0] = lane_malloc(rows * widest * sizeof(double));
        ln->delta[1] = lane_malloc(rows * widest * sizeof(double));
        ln->ones = lane_malloc(rows * sizeof(double));
        ln->grad = lane_malloc(w->nw * sizeof(double));
        ln->gz = lane_malloc((units[0] > 0 ? rows * units[0] : 1)
                             * sizeof(double));
        ln->gt = lane_malloc(rows * sizeof(double));
        if (ln->delta[0] == NULL || ln->delta[1] == NULL || ln->ones == NULL
            || ln->grad == NULL || ln->gz == NULL || ln->gt == NULL)
            goto fail;
        for (size_t i = 0; i < rows; i++)
            ln->ones[i] = 1;
    }
    return w;
fail:
    network_work_free(w);
    return NULL;
}

/* C = op(A) op(B) + beta C (C m x n, inner dimension k), by cblas_dgemm
 * in row-major order. A K of 0 (a
 * network with no usable input) leaves C as beta C, which the BLAS
 * reference allows but not every BLAS tests; so it is handled here. */
static void gemm(enum CBLAS_TRANSPOSE ta, enum CBLAS_TRANSPOSE tb, size_t m,
                 size_t n, size_t k, const double *A, size_t lda,
                 const double *B, size_t ldb, double beta, double *C,
                 size_t ldc)
{
    if (m == 0 || n == 0)
        return;
    if (k == 0) {
        if (beta != 1)
            for (size_t i = 0; i < m; i++)
                for (size_t j = 0; j < n; j++)
                    C[i * ldc + j] = beta == 0 ? 0 : beta * C[i * ldc + j];
        return;
    }
    cblas_dgemm(CblasRowMajor, ta, tb, (int)m, (int)n, (int)k, 1.0, A,
                (int)lda, B, (int)ldb, beta, C, (int)ldc);
}

/* dp[i] *= 1 - a[i]^2 for i < n: the backpropagated delta times tanh's
 * slope at the unit, tanh' = 1 - tanh^2; in vector registers as
 * tanh_block (which see), the same bits from every clone. */
__attribute__((target_clones("avx512f", "avx2", "default")))
static void tanh_slope(double *restrict dp, const double *restrict a,
                       size_t n)
{
    size_t i = 0;
    for (; i + TANH_LANES <= n; i += TANH_LANES) {
        tanh_vd d, x;
        memcpy(&d, dp + i, sizeof d);
        memcpy(&x, a + i, sizeof x);
        d *= 1 - x * x;
        memcpy(dp + i, &d, sizeof d);
    }
    for (; i < n; i++)
        dp[i] *= 1 - a[i] * a[i];
}

/* dp[i ni + j] = d[i] w[j] (1 - a[i ni + j]^2) for i < rows, j < ni: the
 * deltas below a single output unit; and gb[j] += the column sums of dp,
 * row by row, the bias gradient of that layer, in the same pass. As
 * tanh_slope, the same bits from every clone (one operation order, no
 * contraction). */
__attribute__((target_clones("avx512f", "avx2", "default")))
static void outer_slope(double *restrict dp, double *restrict gb,
                        const double *restrict d, const double *restrict w,
                        const double *restrict a, size_t rows, size_t ni)
{
    for (size_t i = 0; i < rows; i++) {
        const double di = d[i];
        double *restrict o = dp + i * ni;
        const double *restrict x = a + i * ni;
        size_t j = 0;
        for (; j + TANH_LANES <= ni; j += TANH_LANES) {
            tanh_vd wv, xv, g;
            memcpy(&wv, w + j, sizeof wv);
            memcpy(&xv, x + j, sizeof xv);
            memcpy(&g, gb + j, sizeof g);
            tanh_vd r = (di * wv) * (1 - xv * xv);
            g += r;
            memcpy(o + j, &r, sizeof r);
            memcpy(gb + j, &g, sizeof g);
        }
        for (; j < ni; j++) {
            o[j] = (di * w[j]) * (1 - x[j] * x[j]);
            gb[j] += o[j];
        }
    }
}

/* Gathering rows idx[0 .. rows-1] of Z (q values a row) and t into gz
 * and gt, whoever gathers: the general layers a block at a time
 * (gather), the fused kernel between its groups' arithmetic, so that the
 * memory works while the vector units do. */
typedef struct row_fetch {
    const uint32_t *idx;
    size_t rows, q;
    const double *Z, *t;
    double *gz, *gt;
} row_fetch;

/* ------------------------------------------------ one hidden layer, fused
 *
 * The usual network, one hidden layer of 8, 16, 24 or 32 units and the
 * output unit, costs most of its time outside its two products: in
 * BLAS calls on small shapes, in tanh over a buffer, and in the passes
 * that re-read that buffer for the output, the deltas and the bias sums.
 * For it, fused_rows does all of that per group of rows, in vector
 * registers: a hidden unit's sum of inputs times weights, its tanh, the
 * output, the loss and the output delta, and (with the gradient) the
 * hidden deltas into a buffer, and the biases' and output weights'
 * gradients. The input weights' gradient, deltas' times inputs over the
 * whole block, stays a cblas_dgemm (its inner dimension is the block's
 * rows: a shape OpenBLAS runs well). Unlike tanh_block, its clones for
 * processors with fused multiply-add (AVX-512, and AVX2 with FMA) contract
 * a * b + c into one rounding (fp-contract=fast): the unit sums are the
 * products that the speed goal counts, and a whole L-BFGS epoch of
 * tests/bench_net.c on one thread ran 1.2 to 1.6 times as fast so (five
 * runs each, interleaved, 2026-12-02). A clone's bits therefore differ from
 * the plain clone's; one machine always runs the same clone, so a job
 * still gives the same workbook, bit for bit, on the same machine. The
 * tanh inlined here stays within 3.92 units in the last place of tanhl
 * with or without contraction (2^21 points of [-20, 20] and 2^21 from
 * 2^-1074 to 2^6, measured for the AVX-512 clone both ways). */
typedef struct fused {
    const double *X, *t;    /* rows x q inputs, their targets (with
                               g.idx, the gathered copies g.gz, g.gt) */
    size_t rows, q;
    const double *wt;       /* the input weights transposed, q x h */
    const double *b, *v;    /* h hidden biases, h output weights */
    double c;               /* the output bias */
    int classify, want_grad;
    double *D;              /* rows x h: the hidden deltas */
    double *gb, *gv, *gc;   /* gradient sums: hidden biases, output
                               weights, output bias */
    long double loss;       /* sum of the rows' losses */
    row_fetch g;            /* with g.idx: the rows to gather as the
                               kernel reaches them */
} fused;

/* Rows ahead of the one being gathered that fetch_row asks the memory
 * for: enough to cover a memory access at some tens of nanoseconds a row
 * (common practice: a prefetch distance of about the memory's latency
 * over the work per item). In tests/bench_net.c on one thread, 6, 16 and
 * 32 ran alike, and no prefetch at all 1.5 times as slow. */
#define ROWS_AHEAD 16

/* Asks the memory for a row of q values (every cache line of it) and its
 * target, ahead of their use. */
static inline __attribute__((always_inline)) void
ask_row(const double *row, const double *target, size_t q)
{
    for (size_t c = 0; c < q; c += TANH_LANES)
        __builtin_prefetch(row + c);
    if (q > 0)
        __builtin_prefetch(row + q - 1);
    __builtin_prefetch(target);
}

/* dst[0 .. q-1] = src[0 .. q-1], a vector at a time, the last vector
 * overlapping the one before it when q is not a multiple of the vector
 * (the two rows do not overlap each other). A call to memcpy a row cost
 * more; and GCC had turned the scalar tail loop into such a call (6.8% of
 * both threads' time in an Adam epoch of tests/bench_net.c, whose 20
 * inputs are two vectors and four more), which the Makefile's
 * -fno-tree-loop-distribute-patterns for network.c also forbids. */
static inline __attribute__((always_inline)) void
copy_row(double *restrict dst, const double *restrict src, size_t q)
{
    tanh_vd v;
    size_t c = 0;
    for (; c + TANH_LANES <= q; c += TANH_LANES) {
        memcpy(&v, src + c, sizeof v);
        memcpy(dst + c, &v, sizeof v);
    }
    if (c < q && q >= TANH_LANES) {
        memcpy(&v, src + q - TANH_LANES, sizeof v);
        memcpy(dst + q - TANH_LANES, &v, sizeof v);
        return;
    }
    for (; c < q; c++)
        dst[c] = src[c];
}

/* Asks for the first ROWS_AHEAD rows, before fetch_row's lead. */
static inline __attribute__((always_inline)) void
ask_first_rows(const row_fetch *g)
{
    for (size_t r = 0; r < ROWS_AHEAD && r < g->rows; r++)
        ask_row(g->Z + (size_t)g->idx[r] * g->q, g->t + g->idx[r], g->q);
}

/* Copies row r into place and asks for the row ROWS_AHEAD later. */
static inline __attribute__((always_inline)) void
fetch_row(const row_fetch *g, size_t r)
{
    const size_t q = g->q;
    if (r + ROWS_AHEAD < g->rows) {
        const uint32_t ahead = g->idx[r + ROWS_AHEAD];
        ask_row(g->Z + (size_t)ahead * q, g->t + ahead, q);
    }
    copy_row(g->gz + r * q, g->Z + (size_t)g->idx[r] * q, q);
    g->gt[r] = g->t[g->idx[r]];
}

/* Rows r0 .. r0 + R - 1 of a gathering kernel (f->g.idx not NULL). */
static inline __attribute__((always_inline)) void
fused_fetch(const fused *f, size_t r0, const size_t R)
{
#pragma GCC unroll 4
    for (size_t r = r0; r < r0 + R; r++)
        fetch_row(&f->g, r);
}

/* The running sums of fused_rows, held in registers over the rows. */
typedef struct fused_sums {
    tanh_vd gb[4], gv[4];
    double gc;
    long double loss;
} fused_sums;

/* R rows from row r0 with H vectors of hidden units (h = 8 H); R and H
 * constants where it is inlined, and the loops over them unrolled, so
 * that the units' sums live in registers and the R H tanh run side by
 * side. */
static inline __attribute__((always_inline)) void
fused_group(const fused *f, fused_sums *S, size_t r0, const size_t R,
            const size_t H)
{
    const size_t q = f->q, h = H * TANH_LANES;
    tanh_vd z[4][4], vv[4];
#pragma GCC unroll 4
    for (size_t i = 0; i < H; i++) {
        tanh_vd bv;
        memcpy(&bv, f->b + i * TANH_LANES, sizeof bv);
        memcpy(&vv[i], f->v + i * TANH_LANES, sizeof vv[i]);
#pragma GCC unroll 4
        for (size_t r = 0; r < R; r++)
            z[r][i] = bv;
    }
    const double *x = f->X + r0 * q;
    for (size_t k = 0; k < q; k++) {
        tanh_vd w[4];
#pragma GCC unroll 4
        for (size_t i = 0; i < H; i++)
            memcpy(&w[i], f->wt + k * h + i * TANH_LANES, sizeof w[i]);
#pragma GCC unroll 4
        for (size_t r = 0; r < R; r++) {
            const double xv = x[r * q + k];
#pragma GCC unroll 4
            for (size_t i = 0; i < H; i++)
                z[r][i] += xv * w[i];
        }
    }
#pragma GCC unroll 4
    for (size_t r = 0; r < R; r++)
#pragma GCC unroll 4
        for (size_t i = 0; i < H; i++)
            tanh_vec(&z[r][i]);
#pragma GCC unroll 4
    for (size_t r = 0; r < R; r++) {
        /* z[r] now holds the units' outputs; the output unit's input is
         * their weighted sum, added lane by lane, then the eight lanes
         * in a fixed order */
        tanh_vd s = z[r][0] * vv[0];
#pragma GCC unroll 4
        for (size_t i = 1; i < H; i++)
            s += z[r][i] * vv[i];
        double out = f->c + (((s[0] + s[1]) + (s[2] + s[3]))
                             + ((s[4] + s[5]) + (s[6] + s[7])));
        double tr = f->t[r0 + r], d;
        if (f->classify) {
            S->loss += softplus(out) - tr * out;
            d = sigmoid(out) - tr;
        } else {
            double e = out - tr;
            S->loss += 0.5 * e * e;
            d = e;
        }
        if (!f->want_grad)
            continue;
        S->gc += d;
        double *D = f->D + (r0 + r) * h;
#pragma GCC unroll 4
        for (size_t i = 0; i < H; i++) {
            const tanh_vd a = z[r][i];
            tanh_vd dl = (d * vv[i]) * (1 - a * a);
            S->gb[i] += dl;
            S->gv[i] += d * a;
            memcpy(D + i * TANH_LANES, &dl, sizeof dl);
        }
    }
}

/* All the rows of f, four at a time, then one at a time; H as in
 * fused_group, 1 to 4. */
static inline __attribute__((always_inline)) void
fused_rows_h(fused *f, const size_t H)
{
    /* the gradient's sums, read and written back only with the gradient:
     * without it they may never have been set */
    fused_sums S = { .loss = 0 };
    if (f->want_grad) {
        S.gc = *f->gc;
#pragma GCC unroll 4
        for (size_t i = 0; i < H; i++) {
            memcpy(&S.gb[i], f->gb + i * TANH_LANES, sizeof S.gb[i]);
            memcpy(&S.gv[i], f->gv + i * TANH_LANES, sizeof S.gv[i]);
        }
    }
    const int gathering = f->g.idx != NULL;
    if (gathering)
        ask_first_rows(&f->g);
    size_t r0 = 0;
    for (; r0 + 4 <= f->rows; r0 += 4) {
        if (gathering)
            fused_fetch(f, r0, 4);
        fused_group(f, &S, r0, 4, H);
    }
    for (; r0 < f->rows; r0++) {
        if (gathering)
            fused_fetch(f, r0, 1);
        fused_group(f, &S, r0, 1, H);
    }
    f->loss = S.loss;
    if (!f->want_grad)
        return;
    *f->gc = S.gc;
#pragma GCC unroll 4
    for (size_t i = 0; i < H; i++) {
        memcpy(f->gb + i * TANH_LANES, &S.gb[i], sizeof S.gb[i]);
        memcpy(f->gv + i * TANH_LANES, &S.gv[i], sizeof S.gv[i]);
    }
}

/* The clones: AVX-512, the x86-64-v3 level (AVX2 and FMA; GCC picks it
 * by those features, where "arch=haswell" would pick it by processor
 * model, Intel Haswell alone) and the baseline. Clang has no optimize
 * attribute; it contracts within an expression only (its default). */
#if defined(__clang__)
#define FUSED_CONTRACT
#else
#define FUSED_CONTRACT __attribute__((optimize("fp-contract=fast")))
#endif

__attribute__((target_clones("avx512f", "arch=x86-64-v3", "default")))
FUSED_CONTRACT
static void fused_rows(fused *f, size_t H)
{
    switch (H) {
    case 1: fused_rows_h(f, 1); break;
    case 2: fused_rows_h(f, 2); break;
    case 3: fused_rows_h(f, 3); break;
    default: fused_rows_h(f, 4); break;
    }
}

/* Whether fused_rows serves a network of these layers (above). */
static int fused_fits(size_t L, const size_t *units)
{
    return L == 2 && units[2] == 1 && units[1] % TANH_LANES == 0
           && units[1] >= TANH_LANES && units[1] <= 4 * TANH_LANES;
}

/* A lane's copy of the weights, built by the lane at the start of a
 * pass: each layer's W transposed into ln->wt, so that the forward
 * product is in W' with both operands untransposed (OpenBLAS 0.3.21 ran
 * that form 1.6 times as fast
 * as in times W transposed on the 128 x 20 x 16 and 512 x 20 x 16
 * products of tests/bench_net.c), and, when tiles, TANH_LANES rows of
 * each hidden layer's biases for tanh_block (the fused kernel reads the
 * biases where they are: their small copies took 1.4% of an Adam epoch
 * of tests/bench_net.c). */
static void lane_weights(size_t L, const size_t *units, const double *theta,
                         lane *ln, int tiles)
{
    const double *th = theta;
    double *wt = ln->wt, *tile = ln->tile;
    for (size_t l = 0; l < L; l++) {
        size_t ni = units[l], no = units[l + 1];
        for (size_t j = 0; j < no; j++)
            for (size_t k = 0; k < ni; k++)
                wt[k * no + j] = th[j * ni + k];
        if (tiles && l + 1 < L) {
            for (size_t i = 0; i < TANH_LANES; i++)
                memcpy(tile + i * no, th + no * ni, no * sizeof *th);
            tile += TANH_LANES * no;
        }
        wt += ni * no;
        th += no * ni + no;
    }
}

/* Forward pass of rows rows of Z (rows x units[0]) into ln->act, with the
 * lane's weights of lane_weights. */
static void forward(size_t L, const size_t *units, const double *theta,
                    const double *Z, size_t rows, lane *ln)
{
    const double *in = Z;
    const double *th = theta, *wt = ln->wt, *tile = ln->tile;
    for (size_t l = 0; l < L; l++) {
        size_t ni = units[l], no = units[l + 1];
        const double *b = th + no * ni;
        double *out = ln->act[l + 1];
        if (l + 1 < L) {
            /* out = tanh(in W' + 1 b'), the bias added in tanh_block's
             * pass from TANH_LANES rows of it */
            gemm(CblasNoTrans, CblasNoTrans, rows, no, ni, in, ni, wt, no,
                 0.0, out, no);
            tanh_block(out, rows * no, tile, TANH_LANES * no);
            tile += TANH_LANES * no;
        } else {
            /* the output layer, no tanh: out = 1 b' + in W', the bias
             * rows first, then beta = 1; for the one output unit of
             * network_fit by dgemv (4 times as fast as dgemm on the
             * 512 x 16 x 1 product) */
            for (size_t i = 0; i < rows; i++)
                for (size_t j = 0; j < no; j++)
                    out[i * no + j] = b[j];
            if (no == 1 && ni > 0)
                cblas_dgemv(CblasRowMajor, CblasNoTrans, (int)rows, (int)ni,
                            1.0, in, (int)ni, th, 1, 1.0, out, 1);
            else
                gemm(CblasNoTrans, CblasNoTrans, rows, no, ni, in, ni, wt,
                     no, 1.0, out, no);
        }
        in = out;
        wt += ni * no;
        th += no * ni + no;
    }
}

/* A pass over n rows Z (n x units[0]) with targets t; or, when idx is
 * not NULL, over rows idx[0..n-1] of them, which the lanes gather a block
 * at a time. */
typedef struct pass {
    size_t L;
    const size_t *units;
    int classify, want_grad;
    const double *theta;
    const double *Z, *t;
    const uint32_t *idx;
    size_t n, lanes;
    network_work *w;
} pass;

/* ln->gz, ln->gt = rows idx[0..rows-1] of Z and t (q values a row), for
 * the general layers. */
static void gather(lane *ln, const double *Z, const double *t,
                   const uint32_t *idx, size_t rows, size_t q)
{
    const row_fetch g = { idx, rows, q, Z, t, ln->gz, ln->gt };
    ask_first_rows(&g);
    for (size_t i = 0; i < rows; i++)
        fetch_row(&g, i);
}

/* Lanes of a pass of n rows: a function of n alone (network.h). */
static size_t lanes_for(size_t n)
{
    size_t k = (n + NETWORK_LANE_ROWS / 2) / NETWORK_LANE_ROWS;
    return k < 1 ? 1 : k > NETWORK_LANES ? NETWORK_LANES : k;
}

/* Lane k of a pass: its rows n k / lanes to n (k + 1) / lanes - 1, in
 * blocks of w->rows, into the lane's loss and (want_grad) gradient. */
static void lane_pass(const pass *p, size_t k)
{
    network_work *w = p->w;
    lane *ln = &w->lane[k];
    const size_t L = p->L, *units = p->units, q = units[0];
    const size_t a = p->n * k / p->lanes, b = p->n * (k + 1) / p->lanes;
    const int fuse = fused_fits(L, units);
    lane_weights(L, units, p->theta, ln, !fuse);
    if (p->want_grad)
        memset(ln->grad, 0, w->nw * sizeof *ln->grad);
    long double sum = 0;
    for (size_t r0 = 0; r0 < b - a; r0 += w->rows) {
        size_t rows = b - a - r0 < w->rows ? b - a - r0 : w->rows;
        const double *Zb = p->Z + (a + r0) * q, *tb = p->t + a + r0;
        if (fuse) {
            const size_t h = units[1];
            double *gW = ln->grad, *gb = gW + h * q, *gv = gb + h;
            fused f = { .X = Zb, .t = tb, .rows = rows, .q = q,
                        .wt = ln->wt, .b = p->theta + h * q,
                        .v = p->theta + h * q + h,
                        .c = p->theta[h * q + 2 * h],
                        .classify = p->classify, .want_grad = p->want_grad,
                        .D = ln->delta[0], .gb = gb, .gv = gv, .gc = gv + h };
            if (p->idx != NULL) {
                /* the kernel gathers the rows as it goes */
                f.g = (row_fetch){ p->idx + a + r0, rows, q, p->Z, p->t,
                                   ln->gz, ln->gt };
                f.X = Zb = ln->gz;
                f.t = ln->gt;
            }
            fused_rows(&f, h / TANH_LANES);
            sum += f.loss;
            /* gW += D' X, the input weights' gradient */
            if (p->want_grad)
                gemm(CblasTrans, CblasNoTrans, h, q, rows, ln->delta[0], h,
                     Zb, q, 1.0, gW, q);
            continue;
        }
        if (p->idx != NULL) {
            gather(ln, p->Z, p->t, p->idx + a + r0, rows, q);
            Zb = ln->gz;
            tb = ln->gt;
        }
        forward(L, units, p->theta, Zb, rows, ln);
        const double *z = ln->act[L];
        double *d = ln->delta[0];
        /* loss, and the output delta d loss / d z: out - t for both the
         * squared error of a linear unit and the log loss of a logistic
         * one (the canonical link); their sum is the output bias's
         * gradient */
        double dsum = 0;
        for (size_t i = 0; i < rows; i++) {
            if (p->classify) {
                sum += softplus(z[i]) - tb[i] * z[i];
                d[i] = sigmoid(z[i]) - tb[i];
            } else {
                double e = z[i] - tb[i];
                sum += 0.5 * e * e;
                d[i] = e;
            }
            dsum += d[i];
        }
        if (!p->want_grad)
            continue;
        /* the layer whose bias gradient is already summed: the output's
         * (one unit, network.h), then any made by outer_slope */
        size_t summed = L - 1;
        ln->grad[w->nw - 1] += dsum;
        /* backpropagation: layer by layer down, d holding d loss / d (the
         * layer's pre-activation), rows x units[l+1] */
        for (size_t l = L; l-- > 0;) {
            size_t ni = units[l], no = units[l + 1];
            double *gW = ln->grad + layer_offset(units, l), *gb = gW + no * ni;
            const double *W = p->theta + layer_offset(units, l);
            const double *act = l == 0 ? Zb : ln->act[l];
            /* gW += d' act; for the one output unit a matrix-vector
             * product, which dgemv runs faster than dgemm a 1-row one */
            if (no == 1 && ni > 0)
                cblas_dgemv(CblasRowMajor, CblasTrans, (int)rows, (int)ni,
                            1.0, act, (int)ni, d, 1, 1.0, gW, 1);
            else
                gemm(CblasTrans, CblasNoTrans, no, ni, rows, d, no, act, ni,
                     1.0, gW, ni);
            /* gb += d' 1, the bias gradient as a column sum */
            if (l != summed)
                cblas_dgemv(CblasRowMajor, CblasTrans, (int)rows, (int)no,
                            1.0, d, (int)no, ln->ones, 1, 1.0, gb, 1);
            if (l == 0)
                break;
            /* d_prev = (d W) .* (1 - a^2), tanh' = 1 - tanh^2; below a
             * single unit d W is an outer product, no sum to form, so it
             * is made in the same pass as the slope and the layer's bias
             * gradient */
            double *dp = d == ln->delta[0] ? ln->delta[1] : ln->delta[0];
            if (no == 1) {
                double *gb_prev = ln->grad + layer_offset(units, l - 1)
                                  + ni * units[l - 1];
                outer_slope(dp, gb_prev, d, W, act, rows, ni);
                summed = l - 1;
            } else {
                gemm(CblasNoTrans, CblasNoTrans, rows, ni, no, d, no, W, ni,
                     0.0, dp, ni);
                tanh_slope(dp, act, rows * ni);
            }
            d = dp;
        }
    }
    ln->loss = sum;
}

/* Member `member` of a team of `size` takes lanes member, member + size,
 * ...: which thread runs a lane never changes what the lane computes. */
static void lane_run(void *ctx, size_t member, size_t size)
{
    const pass *p = ctx;
    for (size_t k = member; k < p->lanes; k += size)
        lane_pass(p, k);
}

/* Runs the lanes of pass p; the sums are then in w->lane[0 .. lanes-1]. */
static void run_lanes(pass *p, int want_grad)
{
    p->want_grad = want_grad;
    p->lanes = lanes_for(p->n);
    if (p->lanes == 1)
        lane_pass(p, 0);
    else
        team_run(p->w->team, lane_run, p);
}

/* Runs pass p and returns the objective as network_loss_grad: the lanes'
 * sums are added in lane order, whatever ran them. */
static double run_pass(pass *p, double lambda, double *grad,
                       double *mean_loss)
{
    network_work *w = p->w;
    const size_t L = p->L, *units = p->units, nw = w->nw;
    run_lanes(p, grad != NULL);
    long double sum = 0;
    for (size_t k = 0; k < p->lanes; k++)
        sum += w->lane[k].loss;
    if (grad != NULL) {
        memcpy(grad, w->lane[0].grad, nw * sizeof *grad);
        for (size_t k = 1; k < p->lanes; k++) {
            const double *g = w->lane[k].grad;
            for (size_t i = 0; i < nw; i++)
                grad[i] += g[i];
        }
    }
    const double *theta = p->theta;
    size_t n = p->n;
    double loss = (double)(sum / n);
    if (mean_loss != NULL)
        *mean_loss = loss;
    long double pen = 0;
    const double *th = theta;
    for (size_t l = 0; l < L; l++) {
        size_t k = units[l + 1] * units[l];
        for (size_t i = 0; i < k; i++)
            pen += th[i] * th[i];
        if (grad != NULL) {
            double *g = grad + (th - theta);
            for (size_t i = 0; i < k; i++)
                g[i] = g[i] / (double)n + lambda * th[i];
            for (size_t i = k; i < k + units[l + 1]; i++)
                g[i] /= (double)n;
        }
        th += k + units[l + 1];
    }
    return loss + 0.5 * lambda * (double)pen;
}

double network_loss_grad(size_t L, const size_t *units, int classify,
                         const double *theta, const double *Z,
                         const double *t, size_t n, double lambda,
                         double *grad, double *mean_loss, network_work *w)
{
    pass p = { L, units, classify, 0, theta, Z, t, NULL, n, 1, w };
    return run_pass(&p, lambda, grad, mean_loss);
}

double network_loss_grad_rows(size_t L, const size_t *units, int classify,
                              const double *theta, const double *Z,
                              const double *t, const uint32_t *idx, size_t n,
                              double lambda, double *grad, double *mean_loss,
                              network_work *w)
{
    pass p = { L, units, classify, 0, theta, Z, t, idx, n, 1, w };
    return run_pass(&p, lambda, grad, mean_loss);
}

/* Room for count doubles, the standardized rows, in *block (to free):
 * from 4 MiB up, placed on a 2 MiB boundary and rounded up to whole 2 MiB
 * pages, which the kernel is advised to back with huge pages (madvise(2),
 * MADV_HUGEPAGE; Debian's kernel then uses them for such memory only).
 * Adam reads each batch's rows scattered over all the training rows, and
 * with 4 KiB pages nearly every row missed the processor's page cache
 * (its TLB). Advising only the whole pages inside a plain malloc block
 * left the rows of tests/bench_net.c (15.3 MiB) 12 MiB of huge pages and
 * the rest, mostly at the start, in 4 KiB pages: the first lane of each
 * batch read them and was the slower one. The extra 2 MiB is address
 * space; at most the rest of the last huge page is memory beyond the
 * rows. Only advice: where it is refused, nothing changes. */
#define HUGE_PAGE ((uintptr_t)2 << 20)

static double *rows_alloc(size_t count, void **block)
{
    size_t bytes = (count > 0 ? count : 1) * sizeof(double);
    if (bytes < 2 * HUGE_PAGE)
        return *block = malloc(bytes);
    if (bytes > SIZE_MAX - 2 * HUGE_PAGE)   /* the rounding would wrap */
        return *block = NULL;
    size_t whole = (bytes + HUGE_PAGE - 1) & ~(HUGE_PAGE - 1);
    char *p = malloc(whole + HUGE_PAGE);
    *block = p;
    if (p == NULL)
        return NULL;
    char *a = (char *)(((uintptr_t)p + HUGE_PAGE - 1) & ~(HUGE_PAGE - 1));
    (void)madvise(a, whole, MADV_HUGEPAGE);
    return (double *)(void *)a;
}

/* ------------------------------------------------------------ the model */

void network_free(network_model *m)
{
    if (m == NULL)
        return;
    free(m->units);
    free(m->W);
    free(m->b);
    free(m->theta);
    free(m->col);
    free(m->in_mean);
    free(m->in_scale);
    free(m->restart_loss);
    free(m->holdout);
    free(m);
}

size_t network_batch(size_t n_train)
{
    size_t b = NETWORK_BATCH;
    while (b < NETWORK_BATCH_MAX && n_train / (2 * b) >= NETWORK_BATCH_STEPS)
        b *= 2;
    return b;
}

size_t network_weights(const network_model *m)
{
    return m->n_weights;
}

/* Points W[l], b[l] into theta. */
static void model_link(network_model *m)
{
    double *th = m->theta;
    for (size_t l = 0; l < m->n_layers; l++) {
        m->W[l] = th;
        th += m->units[l + 1] * m->units[l];
        m->b[l] = th;
        th += m->units[l + 1];
    }
}

double network_predict(const network_model *m, const long double *x)
{
    /* two layers' activations on the stack: hidden layers are at most
     * NETWORK_UNITS_MAX wide, and the input layer is read from x */
    double buf[2][NETWORK_UNITS_MAX];
    const size_t L = m->n_layers;
    const double *in = NULL;
    double z = 0;
    for (size_t l = 0; l < L; l++) {
        size_t ni = m->units[l], no = m->units[l + 1];
        double *out = l + 1 < L ? buf[l % 2] : &z;
        for (size_t j = 0; j < no; j++) {
            const double *Wj = m->W[l] + j * ni;
            double s = m->b[l][j];
            if (l == 0) {
                for (size_t k = 0; k < ni; k++)
                    s += Wj[k] * (double)((x[m->col[k]]
                                           - (long double)m->in_mean[k])
                                          / m->in_scale[k]);
            } else {
                for (size_t k = 0; k < ni; k++)
                    s += Wj[k] * in[k];
            }
            out[j] = s;
        }
        if (l + 1 < L)
            tanh_block(out, no, NULL, 0);
        in = out;
    }
    return m->classify ? sigmoid(z) : m->y_mean + m->y_scale * z;
}

/* A seed for stream k of a fit with seed s (splitmix64's finalizer: Steele,
 * Lea & Flood, OOPSLA 2014), so restarts do not share weights with one
 * another or with the held-out draw. Never 0, which GSL's mt19937 would
 * replace by its default seed. */
static unsigned long mix_seed(unsigned long s, unsigned long k)
{
    uint64_t z = (uint64_t)s + 0x9E3779B97F4A7C15ULL * (k + 1);
    z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ULL;
    z = (z ^ (z >> 27)) * 0x94D049BB133111EBULL;
    z ^= z >> 31;
    unsigned long v = (unsigned long)z;
    return v != 0 ? v : 1;
}

/* Everything one fit needs, sized once (network.h: workspaces are sized
 * per fit, never inside the optimiser loops). */
typedef struct fit_ws {
    size_t L, nw, n_train, n_hold;
    const size_t *units;
    int classify;
    double lambda;
    const double *Zt, *tt;   /* training rows, standardized */
    const double *Zv, *tv;   /* held-out rows */
    network_work *w;
    double *theta, *best, *grad, *g2, *cand, *dir;  /* nw each */
    double *S, *Y, *rho, *alpha;   /* L-BFGS memory */
    double *mo, *vo;               /* Adam moments */
    uint32_t *order;               /* Adam: n_train, the epoch's batches
                                      one after another */
    uint32_t *batch_of;            /* n_train: each row's batch */
    size_t n_batches;
    size_t *count;                 /* NETWORK_LANES rows of count_stride:
                                      a part's batch sizes */
    size_t count_stride;           /* n_batches and a cache line (64
                                      bytes): parts dealt on different
                                      threads count on lines apart */
    size_t *first;                 /* n_batches + 1 */
    team *team;                    /* NULL: one thread */
    int blas_threads;              /* OpenBLAS's threads to restore, or 0 */
    gsl_rng *rng;                  /* held-out draw, start weights */
    gsl_rng *mix;                  /* Adam's epoch seeds (taus2) */
    const network_options *o;
} fit_ws;

/* Loss as reported (network.h): mean squared error on the target's scale
 * from the standardized half squared error, or the log loss itself. */
static double reported(const network_model *m, double loss)
{
    return m->classify ? loss : 2 * loss * m->y_scale * m->y_scale;
}

static double valid_loss(fit_ws *f, const double *theta)
{
    double l;
    if (f->n_hold == 0)
        return NAN;
    network_loss_grad(f->L, f->units, f->classify, theta, f->Zv, f->tv,
                      f->n_hold, 0, NULL, &l, f->w);
    return l;
}

/* Early-stopping bookkeeping shared by the solvers. */
typedef struct tracker {
    double best;       /* best held-out loss (standardized), or +inf */
    double mark;       /* the level the patience counts from */
    long since;        /* epochs since the loss fell below mark's gain */
    long patience;
} tracker;

/* Records the held-out loss v of theta; 1 when patience ran out. */
static int track(fit_ws *f, tracker *k, const double *theta, double v)
{
    if (f->n_hold == 0)
        return 0;
    if (v < k->best) {
        k->best = v;
        memcpy(f->best, theta, f->nw * sizeof *theta);
    }
    if (v < k->mark * (1 - NETWORK_MIN_GAIN)) {
        k->mark = v;
        k->since = 0;
        return 0;
    }
    return ++k->since >= k->patience;
}

/* Nocedal & Wright, 2nd ed., Algorithm 7.4 (two-loop recursion): dir =
 * -H g with H the L-BFGS inverse-Hessian approximation from the stored
 * pairs (oldest first from slot (head - count) mod M), H0 = gamma I with
 * gamma = s'y / y'y of the newest pair (eq. 7.20). */
static void two_loop(fit_ws *f, const double *g, size_t head, size_t count)
{
    const size_t M = NETWORK_LBFGS_MEMORY, nw = f->nw;
    double *d = f->dir;
    for (size_t i = 0; i < nw; i++)
        d[i] = -g[i];
    for (size_t k = 0; k < count; k++) {
        size_t s = (head + M - 1 - k) % M;
        f->alpha[s] = f->rho[s] * cblas_ddot((int)nw, f->S + s * nw, 1, d, 1);
        cblas_daxpy((int)nw, -f->alpha[s], f->Y + s * nw, 1, d, 1);
    }
    if (count > 0) {
        size_t s = (head + M - 1) % M;
        double yy = cblas_ddot((int)nw, f->Y + s * nw, 1, f->Y + s * nw, 1);
        cblas_dscal((int)nw, 1 / (f->rho[s] * yy), d, 1);
    }
    for (size_t k = count; k-- > 0;) {
        size_t s = (head + M - 1 - k) % M;
        double beta = f->rho[s] * cblas_ddot((int)nw, f->Y + s * nw, 1, d, 1);
        cblas_daxpy((int)nw, f->alpha[s] - beta, f->S + s * nw, 1, d, 1);
    }
}

/* Status of one solver run. */
typedef struct run_result {
    network_stop stop;
    long epochs;
} run_result;

static rf_status nonfinite(rf_error *err, long epoch, double rate)
{
    return error_set(err, RF_EINPUT, NULL,
                     "the network's training loss became non-finite at "
                     "epoch %ld; a smaller rate than %g may help", epoch,
                     rate);
}

/* Full-batch L-BFGS from f->theta (Nocedal & Wright, 2nd ed., Algorithm
 * 7.5 with the two-loop recursion, Algorithm 7.4), a backtracking Armijo
 * line search (Algorithm 3.1) with safeguarded quadratic interpolation
 * (sec. 3.5). Pairs failing the curvature condition s'y > 0 (which the
 * Armijo search does not ensure) are skipped (sec. 7.2 discusses the
 * need; skipping is common practice). On return f->theta holds the
 * weights to keep. */
static rf_status run_lbfgs(fit_ws *f, const network_model *m, double rate,
                           long cap, run_result *res, rf_error *err)
{
    const size_t nw = f->nw, M = NETWORK_LBFGS_MEMORY;
    size_t head = 0, count = 0;
    double lt;
    double fx = network_loss_grad(f->L, f->units, f->classify, f->theta,
                                  f->Zt, f->tt, f->n_train, f->lambda,
                                  f->grad, &lt, f->w);
    if (!isfinite(fx))
        return nonfinite(err, 0, rate);
    tracker k = { INFINITY, INFINITY, 0, NETWORK_PATIENCE_LBFGS };
    track(f, &k, f->theta, valid_loss(f, f->theta));
    res->stop = NETWORK_EPOCHS;
    res->epochs = 0;
    for (long it = 1; it <= cap; it++) {
        two_loop(f, f->grad, head, count);
        double gd = cblas_ddot((int)nw, f->grad, 1, f->dir, 1);
        if (!(gd < 0)) {   /* not a descent direction: forget the pairs */
            count = 0;
            two_loop(f, f->grad, head, 0);
            gd = cblas_ddot((int)nw, f->grad, 1, f->dir, 1);
        }
        double gmax = 0;
        for (size_t i = 0; i < nw; i++)
            gmax = fmax(gmax, fabs(f->grad[i]));
        if (!(gd < 0) || gmax <= LBFGS_GTOL) {
            res->stop = NETWORK_CONVERGED;
            break;
        }
        /* first trial: the quasi-Newton step, or with no pairs yet a step
         * of length 1 along -g; never longer than rate times it */
        double step = count > 0 ? 1 : 1 / cblas_dnrm2((int)nw, f->grad, 1);
        step *= rate;
        double fn = NAN, ln = NAN;
        int ok = 0;
        for (int trial = 0; trial < ARMIJO_TRIALS; trial++) {
            for (size_t i = 0; i < nw; i++)
                f->cand[i] = f->theta[i] + step * f->dir[i];
            fn = network_loss_grad(f->L, f->units, f->classify, f->cand,
                                   f->Zt, f->tt, f->n_train, f->lambda,
                                   f->g2, &ln, f->w);
            if (isfinite(fn) && fn <= fx + ARMIJO_C1 * step * gd) {
                ok = 1;
                break;
            }
            /* minimiser of the quadratic through f(0), f'(0), f(step),
             * kept within [0.1, 0.5] of the step (sec. 3.5) */
            double next = 0.5 * step;
            if (isfinite(fn)) {
                double den = 2 * (fn - fx - gd * step);
                if (den > 0)
                    next = fmin(0.5 * step,
                                fmax(0.1 * step, -gd * step * step / den));
            }
            step = next;
        }
        if (!ok) {
            if (count > 0) {   /* retry from steepest descent */
                count = 0;
                it--;
                continue;
            }
            res->stop = NETWORK_CONVERGED;   /* no decrease left to find */
            break;
        }
        /* the pair (s, y) into the ring */
        double *s = f->S + head * nw, *yv = f->Y + head * nw;
        for (size_t i = 0; i < nw; i++) {
            s[i] = f->cand[i] - f->theta[i];
            yv[i] = f->g2[i] - f->grad[i];
        }
        double sy = cblas_ddot((int)nw, s, 1, yv, 1);
        double yy = cblas_ddot((int)nw, yv, 1, yv, 1);
        if (sy > DBL_EPSILON * yy && yy > 0) {
            f->rho[head] = 1 / sy;
            head = (head + 1) % M;
            if (count < M)
                count++;
        }
        double fold = fx;
        memcpy(f->theta, f->cand, nw * sizeof *f->theta);
        memcpy(f->grad, f->g2, nw * sizeof *f->grad);
        fx = fn;
        lt = ln;
        res->epochs = it;
        double v = valid_loss(f, f->theta);
        if (f->o->progress != NULL)
            f->o->progress(f->o->progress_ctx, it, reported(m, lt),
                           f->n_hold ? reported(m, v) : NAN);
        if (track(f, &k, f->theta, v)) {
            res->stop = NETWORK_EARLY_STOP;
            break;
        }
        if (fold - fx <= LBFGS_FTOL * fmax(fmax(fabs(fold), fabs(fx)), 1)) {
            res->stop = NETWORK_CONVERGED;
            break;
        }
    }
    if (f->n_hold > 0)
        memcpy(f->theta, f->best, nw * sizeof *f->theta);
    return RF_OK;
}

/* A uniform integer in [0, s), s >= 1, from r's 32-bit output by
 * Lemire's multiply-and-shift with rejection (Lemire, "Fast random integer
 * generation in an interval", ACM TOMACS 29 (2019) 1, Algorithm 5):
 * unbiased like gsl_rng_uniform_int, without its divisions (GSL's
 * shuffle of all the rows took a tenth of an Adam epoch in
 * tests/bench_net.c). r has a 32-bit output (taus2 here). */
static uint32_t below(gsl_rng *r, uint32_t s)
{
    uint64_t m = (uint64_t)(uint32_t)gsl_rng_get(r) * s;
    uint32_t low = (uint32_t)m;
    if (low < s) {
        uint32_t t = (uint32_t)(-s) % s;
        while (low < t) {
            m = (uint64_t)(uint32_t)gsl_rng_get(r) * s;
            low = (uint32_t)m;
        }
    }
    return (uint32_t)(m >> 32);
}

/* The deal of an Adam epoch: every training row goes to one of
 * f->n_batches batches drawn uniformly at random, and the batches are
 * listed one after another in f->order. Drawing each row's batch
 * independently and uniformly makes every batch a random subset of the
 * rows, each row used once an epoch, as a shuffle cut into pieces would;
 * it is the first step of Rao's and Sandelius's random permutation
 * (Sandelius, Ann. Math. Statist. 33 (1962) 1537), the order within a
 * batch being irrelevant to its gradient. Batch sizes vary (binomially,
 * about n_train / n_batches). Unlike a shuffle it runs in parallel: the
 * rows are cut into parts as a pass cuts them into lanes (lanes_for),
 * each part draws from its own stream seeded from
 * the epoch's seed and the part, so the deal does not depend on the
 * threads; and a batch's rows, ascending within a part, are gathered
 * from memory in address order. */
typedef struct deal {
    fit_ws *f;
    size_t parts;
    unsigned long seed;   /* the epoch's */
} deal;

/* Each part's stream is a taus2 generator seeded for the part, its state
 * on the stack of the thread that deals the part: generators from
 * gsl_rng_alloc sit side by side on the heap, and two threads drawing
 * from neighbours moved the cache line between them at every draw (the
 * deal ran 2.5 times slower on two threads than on one in
 * tests/bench_net.c). gsl_rng is GSL's public struct of a type and its
 * state. */
static void deal_count(void *ctx, size_t member, size_t size)
{
    const deal *d = ctx;
    fit_ws *f = d->f;
    const size_t B = f->n_batches, n = f->n_train;
    unsigned long state[16];   /* taus2 needs 3 */
    assert(gsl_rng_taus2->size <= sizeof state);
    gsl_rng stream = { gsl_rng_taus2, state };
    for (size_t k = member; k < d->parts; k += size) {
        gsl_rng *r = &stream;
        gsl_rng_set(r, mix_seed(d->seed, k));
        size_t *count = f->count + k * f->count_stride;
        uint32_t *batch_of = f->batch_of;
        memset(count, 0, B * sizeof *count);
        /* the bounds in locals: count[] is of size_t, as d->parts is, so
         * the compiler would otherwise divide again at every row */
        const size_t first = n * k / d->parts, end = n * (k + 1) / d->parts;
        for (size_t i = first; i < end; i++) {
            uint32_t b = below(r, (uint32_t)B);
            batch_of[i] = b;
            count[b]++;
        }
    }
}

static void deal_place(void *ctx, size_t member, size_t size)
{
    const deal *d = ctx;
    fit_ws *f = d->f;
    const size_t n = f->n_train;
    for (size_t k = member; k < d->parts; k += size) {
        /* the part's counts are now its next free places */
        size_t *at = f->count + k * f->count_stride;
        const uint32_t *batch_of = f->batch_of;
        uint32_t *order = f->order;
        const size_t first = n * k / d->parts, end = n * (k + 1) / d->parts;
        for (size_t i = first; i < end; i++)
            order[at[batch_of[i]]++] = (uint32_t)i;
    }
}

/* Deals the training rows for one epoch (above): batch b is then rows
 * f->order[f->first[b] .. f->first[b + 1] - 1], ascending within each
 * part, and f->first[n_batches] = n_train. */
static void deal_rows(fit_ws *f)
{
    const size_t B = f->n_batches;
    deal d = { f, lanes_for(f->n_train), gsl_rng_get(f->mix) };
    team_run(f->team, deal_count, &d);
    /* part k's rows of batch b follow part k - 1's */
    size_t at = 0;
    for (size_t b = 0; b < B; b++) {
        f->first[b] = at;
        for (size_t k = 0; k < d.parts; k++) {
            size_t c = f->count[k * f->count_stride + b];
            f->count[k * f->count_stride + b] = at;
            at += c;
        }
    }
    f->first[B] = at;
    team_run(f->team, deal_place, &d);
}

/* One Adam update from the lanes' sums of a batch of `rows` rows, each
 * weight's gradient formed as run_pass forms it (the lanes added in lane
 * order, over the rows, plus the penalty's for a weight, not a bias). On
 * the calling thread: given to the team as slices of the weights, it ran
 * slower in tests/bench_net.c (the slices' cache lines moved between the
 * threads every batch). */
typedef struct adam_step {
    fit_ws *f;
    size_t lanes, rows;
    double a;   /* the step of Kingma & Ba, sec. 2 */
} adam_step;

/* g[i] += h[i], i < n: a lane's sums into lane 0's. */
__attribute__((target_clones("avx512f", "avx2", "default")))
static void add_into(double *restrict g, const double *restrict h, size_t n)
{
    for (size_t i = 0; i < n; i++)
        g[i] += h[i];
}

/* Kingma & Ba's Algorithm 1 for weights i < n from their summed gradient
 * g over `rows` rows, with the penalty's gradient lambda theta when pen.
 * In vector registers where there are any: GCC vectorizes the loops
 * (Makefile: network.c is built without errno from sqrt), and each clone
 * performs the same correctly rounded
 * operations as the scalar loop (no contraction), so every clone gives
 * the same bits. It took 3 us a batch in scalar code, 5% of an Adam
 * epoch of tests/bench_net.c. */
__attribute__((target_clones("avx512f", "avx2", "default")))
static void adam_weights(double *restrict theta, double *restrict mo,
                         double *restrict vo, const double *restrict g,
                         size_t n, double rows, int pen, double lambda,
                         double a)
{
    if (pen)
        for (size_t i = 0; i < n; i++) {
            double gi = g[i] / rows + lambda * theta[i];
            mo[i] = ADAM_B1 * mo[i] + (1 - ADAM_B1) * gi;
            vo[i] = ADAM_B2 * vo[i] + (1 - ADAM_B2) * gi * gi;
            theta[i] -= a * mo[i] / (sqrt(vo[i]) + ADAM_EPS);
        }
    else
        for (size_t i = 0; i < n; i++) {
            double gi = g[i] / rows;
            mo[i] = ADAM_B1 * mo[i] + (1 - ADAM_B1) * gi;
            vo[i] = ADAM_B2 * vo[i] + (1 - ADAM_B2) * gi * gi;
            theta[i] -= a * mo[i] / (sqrt(vo[i]) + ADAM_EPS);
        }
}

static void adam_update(const adam_step *st)
{
    fit_ws *f = st->f;
    const network_work *w = f->w;
    double *g = w->lane[0].grad;   /* rewritten by the next batch */
    for (size_t k = 1; k < st->lanes; k++)
        add_into(g, w->lane[k].grad, f->nw);
    size_t i = 0;
    for (size_t l = 0; l < f->L; l++) {
        /* the layer's weights, then its biases (not penalised) */
        size_t nwl = f->units[l + 1] * f->units[l], nb = f->units[l + 1];
        adam_weights(f->theta + i, f->mo + i, f->vo + i, g + i, nwl,
                     (double)st->rows, 1, f->lambda, st->a);
        adam_weights(f->theta + i + nwl, f->mo + i + nwl, f->vo + i + nwl,
                     g + i + nwl, nb, (double)st->rows, 0, 0, st->a);
        i += nwl + nb;
    }
}

/* Mini-batch Adam from f->theta (Kingma & Ba, ICLR 2015, Algorithm 1),
 * the rows dealt into batches afresh every epoch (deal_rows). */
static rf_status run_adam(fit_ws *f, const network_model *m, double rate,
                          long cap, run_result *res, rf_error *err)
{
    const size_t nw = f->nw;
    memset(f->mo, 0, nw * sizeof *f->mo);
    memset(f->vo, 0, nw * sizeof *f->vo);
    tracker k = { INFINITY, INFINITY, 0, NETWORK_PATIENCE_ADAM };
    track(f, &k, f->theta, valid_loss(f, f->theta));
    double b1t = 1, b2t = 1;
    res->stop = NETWORK_EPOCHS;
    res->epochs = 0;
    for (long ep = 1; ep <= cap; ep++) {
        deal_rows(f);
        long double epoch_loss = 0;
        for (size_t b = 0; b < f->n_batches; b++) {
            size_t r0 = f->first[b], rows = f->first[b + 1] - r0;
            if (rows == 0)
                continue;
            pass bp = { f->L, f->units, f->classify, 0, f->theta, f->Zt,
                        f->tt, f->order + r0, rows, 1, f->w };
            run_lanes(&bp, 1);
            long double sum = 0;
            for (size_t j = 0; j < bp.lanes; j++)
                sum += f->w->lane[j].loss;
            if (!isfinite((double)sum))
                return nonfinite(err, ep, rate);
            epoch_loss += sum;
            b1t *= ADAM_B1;
            b2t *= ADAM_B2;
            adam_step st = { f, bp.lanes, rows,
                             rate * sqrt(1 - b2t) / (1 - b1t) };
            adam_update(&st);
        }
        for (size_t i = 0; i < nw; i++)
            if (!isfinite(f->theta[i]))
                return nonfinite(err, ep, rate);
        res->epochs = ep;
        double v = valid_loss(f, f->theta);
        if (f->o->progress != NULL)
            f->o->progress(f->o->progress_ctx, ep,
                           reported(m, (double)(epoch_loss / f->n_train)),
                           f->n_hold ? reported(m, v) : NAN);
        if (track(f, &k, f->theta, v)) {
            res->stop = NETWORK_EARLY_STOP;
            break;
        }
    }
    if (f->n_hold > 0)
        memcpy(f->theta, f->best, nw * sizeof *f->theta);
    return RF_OK;
}

/* Glorot-uniform weights, U(-a, a) with a = sqrt(6 / (fan_in + fan_out))
 * (Glorot & Bengio, AISTATS 2010, eq. 16), zero biases. */
static void glorot(const size_t *units, size_t L, double *theta, gsl_rng *r)
{
    double *th = theta;
    for (size_t l = 0; l < L; l++) {
        size_t ni = units[l], no = units[l + 1];
        double a = sqrt(6.0 / (double)(ni + no));
        for (size_t i = 0; i < no * ni; i++)
            th[i] = a * (2 * gsl_rng_uniform(r) - 1);
        memset(th + no * ni, 0, no * sizeof *th);
        th += no * ni + no;
    }
}

static rf_status check_options(const network_options *o, rf_error *err)
{
    if (o->n_hidden < 1 || o->n_hidden > NETWORK_HIDDEN_MAX)
        return error_set(err, RF_EINPUT, NULL,
                         "a network has 1 to %d hidden layers, not %zu",
                         NETWORK_HIDDEN_MAX, o->n_hidden);
    for (size_t l = 0; l < o->n_hidden; l++)
        if (o->hidden[l] < 1 || o->hidden[l] > NETWORK_UNITS_MAX)
            return error_set(err, RF_EINPUT, NULL,
                             "hidden layer %zu has %zu units; a layer has 1 "
                             "to %d", l + 1, o->hidden[l], NETWORK_UNITS_MAX);
    if (o->solver != NETWORK_SOLVER_AUTO && o->solver != NETWORK_LBFGS
        && o->solver != NETWORK_ADAM)
        return error_set(err, RF_EINPUT, NULL, "unknown network solver %d",
                         (int)o->solver);
    if (o->restarts < 1)
        return error_set(err, RF_EINPUT, NULL,
                         "restarts must be 1 or more, not %zu", o->restarts);
    if (!isfinite(o->ridge) || o->ridge < 0)
        return error_set(err, RF_EINPUT, NULL,
                         "the ridge penalty must be 0 or more, not %g",
                         o->ridge);
    if (!isfinite(o->rate) || o->rate < 0)
        return error_set(err, RF_EINPUT, NULL,
                         "the rate must be a positive number (or 0 for the "
                         "default), not %g", o->rate);
    if (o->epochs < 0)
        return error_set(err, RF_EINPUT, NULL,
                         "epochs must be 0 (the default) or more, not %ld",
                         o->epochs);
    if (!(o->holdout >= 0 && o->holdout <= 0.5))
        return error_set(err, RF_EINPUT, NULL,
                         "the held-out share must be from 0 to 0.5, not %g",
                         o->holdout);
    return RF_OK;
}

/* Frees what fit_ws owns (not the model). */
static void ws_free(fit_ws *f)
{
    team_free(f->team);
    if (f->blas_threads > 0)
        openblas_set_num_threads(f->blas_threads);
    network_work_free(f->w);
    free(f->theta);
    free(f->best);
    free(f->grad);
    free(f->g2);
    free(f->cand);
    free(f->dir);
    free(f->S);
    free(f->Y);
    free(f->rho);
    free(f->alpha);
    free(f->mo);
    free(f->vo);
    free(f->order);
    free(f->batch_of);
    free(f->count);
    free(f->first);
    if (f->rng != NULL)
        gsl_rng_free(f->rng);
    if (f->mix != NULL)
        gsl_rng_free(f->mix);
}

rf_status network_fit(const long double *X, const double *y, size_t n,
                      size_t p, const network_options *o,
                      network_model **out, rf_error *err)
{
    *out = NULL;
    rf_status st = check_options(o, err);
    if (st != RF_OK)
        return st;
    if (p == 0)
        return error_set(err, RF_EINPUT, NULL, "the model has no terms");
    if (n > INT_MAX || p > INT_MAX || n > SIZE_MAX / sizeof(double) / p)
        return error_set(err, RF_EINPUT, NULL,
                         "%zu rows by %zu terms is too large for the network",
                         n, p);
    size_t n_hold = 0;
    if (o->holdout > 0) {
        n_hold = (size_t)floor(o->holdout * (double)n + 0.5);
        if (n_hold < 1)
            n_hold = 1;
    }
    if (n < n_hold + 2)
        return error_set(err, RF_EINPUT, NULL,
                         "a network needs at least %zu rows (2 to train%s), "
                         "not %zu", n_hold + 2,
                         n_hold ? " and the held-out ones" : "", n);
    for (size_t i = 0; i < n; i++) {
        if (!isfinite(y[i]))
            return error_set(err, RF_EINPUT, NULL,
                             "fitted row %zu has a non-finite target", i + 1);
        if (o->classify && y[i] != 0 && y[i] != 1)
            return error_set(err, RF_EINPUT, NULL,
                             "fitted row %zu has the target %g; a yes/no "
                             "network needs 0 or 1", i + 1, y[i]);
        for (size_t j = 0; j < p; j++)
            if (!isfinite(X[i * p + j]))
                return error_set(err, RF_EINPUT, NULL,
                                 "fitted row %zu has a non-finite input",
                                 i + 1);
    }

    fit_ws f;
    memset(&f, 0, sizeof f);
    f.o = o;
    f.classify = o->classify;
    f.n_hold = n_hold;
    f.n_train = n - n_hold;
    double *Z = NULL, *t = NULL;
    void *Z_block = NULL;   /* rows_alloc's, holding Z */
    char *held = NULL;
    st = RF_ENOMEM;
    network_model *m = calloc(1, sizeof *m);
    if (m == NULL)
        goto fail;
    const size_t L = o->n_hidden + 1;
    m->p = p;
    m->n = n;
    m->n_layers = L;
    m->classify = o->classify;
    m->ridge = o->ridge;
    m->restarts = o->restarts;
    m->units = malloc((L + 1) * sizeof *m->units);
    m->W = malloc(L * sizeof *m->W);
    m->b = malloc(L * sizeof *m->b);
    m->in_mean = malloc(p * sizeof *m->in_mean);
    m->in_scale = malloc(p * sizeof *m->in_scale);
    m->col = malloc(p * sizeof *m->col);
    m->restart_loss = malloc(o->restarts * sizeof *m->restart_loss);
    m->holdout = malloc((n_hold ? n_hold : 1) * sizeof *m->holdout);
    held = calloc(n, 1);
    f.rng = gsl_rng_alloc(gsl_rng_mt19937);
    f.mix = gsl_rng_alloc(gsl_rng_taus2);
    if (m->units == NULL || m->W == NULL || m->b == NULL
        || m->in_mean == NULL || m->in_scale == NULL || m->col == NULL
        || m->restart_loss == NULL || m->holdout == NULL || held == NULL
        || f.rng == NULL || f.mix == NULL)
        goto fail;

    /* 1. the held-out rows: a simple random sample drawn with the seed,
     * kept in ascending order (gsl_ran_choose keeps the order) */
    m->n_holdout = n_hold;
    if (n_hold > 0) {
        size_t *all = malloc(n * sizeof *all);
        if (all == NULL)
            goto fail;
        for (size_t i = 0; i < n; i++)
            all[i] = i;
        gsl_rng_set(f.rng, mix_seed(o->seed, 0));
        gsl_ran_choose(f.rng, m->holdout, n_hold, all, n, sizeof *all);
        free(all);
        for (size_t i = 0; i < n_hold; i++)
            held[m->holdout[i]] = 1;
    }

    /* 2. standardization on the training rows, two passes in long double;
     * a column constant there carries nothing (the intercept among them) */
    size_t q = 0;
    for (size_t j = 0; j < p; j++) {
        long double sum = 0, ss = 0;
        for (size_t i = 0; i < n; i++)
            if (!held[i])
                sum += X[i * p + j];
        long double mean = sum / f.n_train;
        for (size_t i = 0; i < n; i++)
            if (!held[i]) {
                long double d = X[i * p + j] - mean;
                ss += d * d;
            }
        double sd = (double)sqrtl(ss / f.n_train);
        if (!(sd > 0) || !isfinite(sd))
            continue;
        m->col[q] = j;
        m->in_mean[q] = (double)mean;
        m->in_scale[q] = sd;
        q++;
    }
    m->y_mean = 0;
    m->y_scale = 1;
    if (!o->classify) {
        long double sum = 0, ss = 0;
        for (size_t i = 0; i < n; i++)
            if (!held[i])
                sum += y[i];
        long double mean = sum / f.n_train;
        for (size_t i = 0; i < n; i++)
            if (!held[i])
                ss += (y[i] - mean) * (y[i] - mean);
        double sd = (double)sqrtl(ss / f.n_train);
        m->y_mean = (double)mean;
        if (sd > 0 && isfinite(sd))
            m->y_scale = sd;
    }

    /* 3. shapes and sizes: q < INT_MAX, units <= NETWORK_UNITS_MAX, so the
     * weights count fits a size_t; n q doubles were bounded above */
    m->units[0] = q;
    for (size_t l = 0; l < o->n_hidden; l++)
        m->units[l + 1] = o->hidden[l];
    m->units[L] = 1;
    size_t nw = layer_offset(m->units, L);
    if (nw > (size_t)INT_MAX / NETWORK_LBFGS_MEMORY) {
        st = error_set(err, RF_EINPUT, NULL,
                       "a network of %zu weights is too large", nw);
        goto fail;
    }
    m->n_weights = nw;
    m->theta = malloc(nw * sizeof *m->theta);
    if (m->theta == NULL)
        goto fail;
    model_link(m);
    m->solver = o->solver;
    if (m->solver == NETWORK_SOLVER_AUTO)
        m->solver = (double)f.n_train * (double)nw
                    <= (double)NETWORK_LBFGS_BUDGET ? NETWORK_LBFGS
                                                     : NETWORK_ADAM;
    int adam = m->solver == NETWORK_ADAM;
    m->epochs_cap = o->epochs > 0 ? o->epochs
                    : adam ? NETWORK_ADAM_EPOCHS : NETWORK_LBFGS_EPOCHS;
    m->rate = o->rate > 0 ? o->rate : adam ? NETWORK_ADAM_RATE : 1;

    /* 4. the standardized rows: training rows first, then the held-out
     * ones, each block contiguous for the products */
    Z = rows_alloc(n * q, &Z_block);
    t = malloc(n * sizeof *t);
    if (Z == NULL || t == NULL)
        goto fail;
    for (size_t i = 0, a = 0, h = f.n_train; i < n; i++) {
        size_t r = held[i] ? h++ : a++;
        for (size_t k = 0; k < q; k++)
            Z[r * q + k] = (double)((X[i * p + m->col[k]]
                                     - (long double)m->in_mean[k])
                                    / m->in_scale[k]);
        t[r] = o->classify ? y[i] : (y[i] - m->y_mean) / m->y_scale;
    }
    f.L = L;
    f.nw = nw;
    f.units = m->units;
    f.lambda = o->ridge / (double)f.n_train;
    f.Zt = Z;
    f.tt = t;
    f.Zv = Z + f.n_train * q;
    f.tv = t + f.n_train;
    size_t block = n < BLOCK_ROWS ? n : BLOCK_ROWS;
    f.w = network_work_alloc(L, m->units, block);
    f.theta = malloc(nw * sizeof *f.theta);
    f.best = malloc(nw * sizeof *f.best);
    if (f.w == NULL || f.theta == NULL || f.best == NULL)
        goto fail;
    /* the threads: no more than the lanes of the passes they share (for
     * Adam, of its batches); a team that cannot be had means one thread,
     * not a failed fit */
    if (adam)
        m->batch = network_batch(f.n_train);
    size_t threads = o->threads > 0 ? o->threads : team_cores();
    size_t lanes = lanes_for(adam && m->batch < f.n_train ? m->batch
                                                          : f.n_train);
    if (threads > lanes)
        threads = lanes;
    if (threads > 1) {
        f.team = team_create(threads);
        f.w->team = f.team;
    }
    f.blas_threads = blas_on_caller();   /* whatever the team */
    if (adam) {
        /* batches of m->batch rows on average, at least one */
        f.n_batches = (f.n_train + m->batch / 2) / m->batch;
        if (f.n_batches < 1)
            f.n_batches = 1;
        f.mo = malloc(nw * sizeof *f.mo);
        f.vo = malloc(nw * sizeof *f.vo);
        f.order = malloc(f.n_train * sizeof *f.order);
        f.batch_of = malloc(f.n_train * sizeof *f.batch_of);
        f.count_stride = f.n_batches + 64 / sizeof *f.count;
        f.count = malloc(NETWORK_LANES * f.count_stride * sizeof *f.count);
        f.first = malloc((f.n_batches + 1) * sizeof *f.first);
        if (f.mo == NULL || f.vo == NULL || f.order == NULL
            || f.batch_of == NULL || f.count == NULL || f.first == NULL)
            goto fail;
    } else {
        f.grad = malloc(nw * sizeof *f.grad);
        f.g2 = malloc(nw * sizeof *f.g2);
        f.cand = malloc(nw * sizeof *f.cand);
        f.dir = malloc(nw * sizeof *f.dir);
        f.S = malloc(NETWORK_LBFGS_MEMORY * nw * sizeof *f.S);
        f.Y = malloc(NETWORK_LBFGS_MEMORY * nw * sizeof *f.Y);
        f.rho = malloc(NETWORK_LBFGS_MEMORY * sizeof *f.rho);
        f.alpha = malloc(NETWORK_LBFGS_MEMORY * sizeof *f.alpha);
        if (f.grad == NULL || f.g2 == NULL || f.cand == NULL || f.dir == NULL
            || f.S == NULL || f.Y == NULL || f.rho == NULL || f.alpha == NULL)
            goto fail;
    }

    /* 5. the restarts, the best kept by held-out loss (training loss when
     * nothing is held out) */
    double best = INFINITY;
    for (size_t r = 0; r < o->restarts; r++) {
        gsl_rng_set(f.rng, mix_seed(o->seed, r + 1));
        gsl_rng_set(f.mix, mix_seed(o->seed, o->restarts + r + 1));
        glorot(m->units, L, f.theta, f.rng);
        run_result res = { NETWORK_EPOCHS, 0 };
        st = adam ? run_adam(&f, m, m->rate, m->epochs_cap, &res, err)
                  : run_lbfgs(&f, m, m->rate, m->epochs_cap, &res, err);
        if (st != RF_OK)
            goto fail;
        double lt;
        network_loss_grad(L, m->units, f.classify, f.theta, f.Zt, f.tt,
                          f.n_train, 0, NULL, &lt, f.w);
        double lv = valid_loss(&f, f.theta);
        double score = n_hold ? lv : lt;
        if (!isfinite(lt) || (n_hold && !isfinite(lv))) {
            st = nonfinite(err, res.epochs, m->rate);
            goto fail;
        }
        m->restart_loss[r] = reported(m, score);
        if (r == 0 || score < best) {
            best = score;
            memcpy(m->theta, f.theta, nw * sizeof *m->theta);
            m->restart_best = r;
            m->stop = res.stop;
            m->epochs = res.epochs;
            m->train_loss = reported(m, lt);
            m->valid_loss = n_hold ? reported(m, lv) : NAN;
        }
    }
    free(Z_block);
    free(t);
    free(held);
    ws_free(&f);
    *out = m;
    return RF_OK;

fail:
    if (st == RF_ENOMEM)
        error_nomem(err, NULL);
    free(Z_block);
    free(t);
    free(held);
    ws_free(&f);
    network_free(m);
    return st;
}

/* ------------------------------------------------------------ importance */

rf_status network_importance(const network_model *m, const long double *X,
                             const double *y, size_t n,
                             const size_t *group_first,
                             const size_t *group_len, size_t n_groups,
                             unsigned long seed, double *out, rf_error *err)
{
    if (n != m->n)
        return error_set(err, RF_EINPUT, NULL,
                         "importance needs the %zu rows of the fit, not %zu",
                         m->n, n);
    for (size_t g = 0; g < n_groups; g++)
        if (group_first[g] > m->p || group_len[g] > m->p - group_first[g])
            return error_set(err, RF_EINPUT, NULL,
                             "input group %zu (columns %zu to %zu) is outside "
                             "the %zu columns", g + 1, group_first[g] + 1,
                             group_first[g] + group_len[g], m->p);
    const size_t q = m->units[0];
    const size_t nh = m->n_holdout ? m->n_holdout : n;
    double *Z = malloc((nh * q > 0 ? nh * q : 1) * sizeof *Z);
    double *Zp = malloc((nh * q > 0 ? nh * q : 1) * sizeof *Zp);
    double *t = malloc(nh * sizeof *t);
    size_t *perm = malloc(nh * sizeof *perm);
    network_work *w = network_work_alloc(m->n_layers, m->units,
                                         nh < BLOCK_ROWS ? nh : BLOCK_ROWS);
    gsl_rng *r = gsl_rng_alloc(gsl_rng_mt19937);
    if (Z == NULL || Zp == NULL || t == NULL || perm == NULL || w == NULL
        || r == NULL) {
        free(Z);
        free(Zp);
        free(t);
        free(perm);
        network_work_free(w);
        if (r != NULL)
            gsl_rng_free(r);
        return error_nomem(err, NULL);
    }
    for (size_t k = 0; k < nh; k++) {
        size_t i = m->n_holdout ? m->holdout[k] : k;
        for (size_t u = 0; u < q; u++)
            Z[k * q + u] = (double)((X[i * m->p + m->col[u]]
                                     - (long double)m->in_mean[u])
                                    / m->in_scale[u]);
        t[k] = m->classify ? y[i] : (y[i] - m->y_mean) / m->y_scale;
    }
    int blas_threads = blas_on_caller();
    double base;
    network_loss_grad(m->n_layers, m->units, m->classify, m->theta, Z, t, nh,
                      0, NULL, &base, w);
    gsl_rng_set(r, mix_seed(seed, 0));
    for (size_t g = 0; g < n_groups; g++) {
        /* the group's input units (col[] ascends with the columns) */
        size_t u0 = 0, u1;
        while (u0 < q && m->col[u0] < group_first[g])
            u0++;
        u1 = u0;
        while (u1 < q && m->col[u1] < group_first[g] + group_len[g])
            u1++;
        if (u1 == u0) {
            out[g] = 0;
            continue;
        }
        long double rise = 0;
        for (int s = 0; s < NETWORK_PERMUTATIONS; s++) {
            for (size_t k = 0; k < nh; k++)
                perm[k] = k;
            gsl_ran_shuffle(r, perm, nh, sizeof *perm);
            memcpy(Zp, Z, nh * q * sizeof *Zp);
            for (size_t k = 0; k < nh; k++)
                memcpy(Zp + k * q + u0, Z + perm[k] * q + u0,
                       (u1 - u0) * sizeof *Zp);
            double l;
            network_loss_grad(m->n_layers, m->units, m->classify, m->theta,
                              Zp, t, nh, 0, NULL, &l, w);
            rise += l - base;
        }
        out[g] = reported(m, (double)(rise / NETWORK_PERMUTATIONS));
    }
    openblas_set_num_threads(blas_threads);
    free(Z);
    free(Zp);
    free(t);
    free(perm);
    network_work_free(w);
    gsl_rng_free(r);
    return RF_OK;
}
