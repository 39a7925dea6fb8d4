/*
 * ridge.c: the exact ridge fit and the ridge path (see ridge.h for the
 * problem and the contracts).
 *
 * Method, in order:
 *  1. Standardize (two passes over the fitted rows, in long double): each
 *     kept non-intercept term is centred at its mean (with an intercept)
 *     and divided by s_j, its standard deviation, or its root mean square
 *     without an intercept; y is centred with an intercept (Z'y = Z'y_c
 *     in exact arithmetic, but a target far from 0 would carry its size
 *     into the rounding of Q'y: 9 digits lost at a mean of 2^27 and a
 *     spread of 1, test_ridge_target_far_from_zero). With the
 *     columns centred the intercept separates from the other terms: the
 *     penalised problem becomes min ||y_c - Z g||^2 + lambda ||g||^2 over
 *     g_j = s_j b_j, with b_0 = mean(y) - sum_j b_j mean(x_j) afterwards
 *     (ESL, 2nd ed., sec. 3.4.1).
 *  2. Householder QR of [Z y_c], streamed in blocks of RIDGE_BLOCK rows
 *     (tall-skinny QR: each block is stacked under the triangle so far and
 *     the pair factored by GSL's gsl_linalg_QR_UR_decomp; Golub & Van
 *     Loan, Matrix Computations, 4th ed., sec. 5.2 and 5.4). Carrying y as
 *     the last column gives R and c = Q'y_c with no stored Q. Z is never
 *     formed whole and the normal equations Z'Z never at all.
 *  3. ridge_fit appends sqrt(lambda) I (right-hand side 0) as one more
 *     block, so the triangle is that of the augmented system
 *     [Z; sqrt(lambda) I], and solves R g = c by back substitution.
 *  4. The path takes the SVD R = U D V' of the small triangle
 *     (gsl_linalg_SV_decomp); since Z = (Q U) D V', the ridge solution is
 *     g = V diag(d_k / (d_k^2 + lambda)) U'c (ESL, eq. 3.47), O(p^2) for
 *     each lambda.
 */
#include "ridge.h"

#include <float.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_blas.h>
#include <gsl/gsl_linalg.h>
#include <gsl/gsl_matrix.h>
#include <gsl/gsl_vector.h>

/* What a term is in one set of fitted rows. */
enum role {
    ROLE_DROPPED,    /* not kept by linear_fit: NaN */
    ROLE_INTERCEPT,  /* column 0 with an intercept: from the means */
    ROLE_ACTIVE,     /* standardized and penalised */
    ROLE_IDLE        /* kept, but no spread in these rows: 0 */
};

/* The standardization of one set of rows. */
typedef struct frame {
    size_t p, q, m;          /* terms, active terms, rows */
    int intercept;
    unsigned char *role;     /* p: enum role */
    size_t *col;             /* q: design column of active term k */
    long double *center;     /* q: mean (0 without an intercept) */
    long double *scale;      /* q: s_j */
    long double ybar;        /* mean of y (0 without an intercept) */
} frame;

struct ridge_path {
    frame f;
    double *V;   /* q x q, row-major: right singular vectors of R */
    double *d;   /* q: singular values, decreasing */
    double *u;   /* q: U'c, c = Q'y_c */
};

static void frame_free(frame *f)
{
    free(f->role);
    free(f->col);
    free(f->center);
    free(f->scale);
    memset(f, 0, sizeof *f);
}

static size_t row_at(const size_t *rows, size_t k)
{
    return rows != NULL ? rows[k] : k;
}

static int kept(const linear_drop *drop, size_t j)
{
    return drop == NULL || drop[j] == LINEAR_KEPT;
}

static rf_status check_lambda(double lambda, rf_error *err)
{
    if (!isfinite(lambda) || lambda < 0)
        return error_set(err, RF_EINPUT, NULL,
                         "the ridge penalty must be 0 or more, not %g",
                         lambda);
    return RF_OK;
}

/* frame_init's way out on an error: releases what it holds, returns st. */
static rf_status frame_fail(frame *f, long double *sum, long double *lo,
                            long double *hi, rf_status st)
{
    free(sum);
    free(lo);
    free(hi);
    frame_free(f);
    return st;
}

/* Checks the inputs and standardizes the m rows (step 1). On error f is
 * left empty. The checks of the rows share the first pass over them, as
 * a pass over a million rows is a large part of the time of a path. */
static rf_status frame_init(frame *f, const long double *X,
                            const long double *y, size_t n, size_t p,
                            int intercept, const linear_drop *drop,
                            const size_t *rows, size_t m, rf_error *err)
{
    memset(f, 0, sizeof *f);
    if (linear_terms_check(p, err))
        return err->status;
    if (rows == NULL)
        m = n;
    if (m == 0)
        return error_set(err, RF_EINPUT, NULL, "there are no rows to fit");
    if (intercept && !kept(drop, 0))
        return error_set(err, RF_EINPUT, NULL,
                         "the intercept was dropped; a ridge fit needs it "
                         "kept or the model without one");
    size_t nk = 0;
    for (size_t j = 0; j < p; j++)
        nk += kept(drop, j);
    if (nk == 0)
        return error_set(err, RF_EINPUT, NULL, "every term was dropped");

    f->p = p;
    f->m = m;
    f->intercept = intercept;
    f->role = malloc(p * sizeof *f->role);
    f->col = malloc(p * sizeof *f->col);
    f->center = malloc(p * sizeof *f->center);
    f->scale = malloc(p * sizeof *f->scale);
    long double *sum = calloc(p, sizeof *sum);
    long double *lo = malloc(p * sizeof *lo);
    long double *hi = malloc(p * sizeof *hi);
    if (f->role == NULL || f->col == NULL || f->center == NULL
        || f->scale == NULL || sum == NULL || lo == NULL || hi == NULL)
        return frame_fail(f, sum, lo, hi, error_nomem(err, "ridge fit"));

    /* pass 1, a block of rows at a time: the checks in row order, then
     * the sums and ranges of the penalised kept columns a column at a time,
     * so each accumulator stays in a register (the x87 unit does not
     * forward a stored long double to the next load; with the same order
     * in pass 2 and in factor(), a path on 1,000,000 rows by 10 terms went
     * from 0.28 s to 0.21 s). A value is finite as a double when
     * |v| <= DBL_MAX, which a NaN fails. */
    for (size_t j = 0; j < p; j++)
        f->role[j] = !kept(drop, j) ? ROLE_DROPPED
                     : intercept && j == 0 ? ROLE_INTERCEPT : ROLE_ACTIVE;
    long double ysum = 0;
    for (size_t k0 = 0; k0 < m; k0 += RIDGE_BLOCK) {
        size_t b = m - k0 < RIDGE_BLOCK ? m - k0 : RIDGE_BLOCK;
        for (size_t k = k0; k < k0 + b; k++) {
            size_t i = row_at(rows, k);
            if (i >= n)
                return frame_fail(f, sum, lo, hi,
                                  error_set(err, RF_EINPUT, NULL,
                                            "row index %zu is past the %zu "
                                            "rows", i, n));
            if (!(fabsl(y[i]) <= DBL_MAX))
                return frame_fail(f, sum, lo, hi,
                                  error_set(err, RF_EINPUT, NULL,
                                            "fitted row %zu has a non-finite "
                                            "target", i + 1));
            const long double *row = X + i * p;
            if (intercept && row[0] != 1)
                return frame_fail(f, sum, lo, hi,
                                  error_set(err, RF_EINPUT, NULL,
                                            "fitted row %zu: the intercept "
                                            "column is not 1", i + 1));
            for (size_t j = 0; j < p; j++)
                if (f->role[j] == ROLE_ACTIVE && !(fabsl(row[j]) <= DBL_MAX))
                    return frame_fail(f, sum, lo, hi,
                                      error_set(err, RF_EINPUT, NULL,
                                                "fitted row %zu has a "
                                                "non-finite input", i + 1));
            ysum += y[i];
        }
        for (size_t j = 0; j < p; j++) {
            if (f->role[j] != ROLE_ACTIVE)
                continue;
            long double s = 0, l = X[row_at(rows, k0) * p + j], h = l;
            for (size_t k = k0; k < k0 + b; k++) {
                long double v = X[row_at(rows, k) * p + j];
                s += v;
                if (v < l)
                    l = v;
                if (v > h)
                    h = v;
            }
            sum[j] += s;
            lo[j] = k0 == 0 || l < lo[j] ? l : lo[j];
            hi[j] = k0 == 0 || h > hi[j] ? h : hi[j];
        }
    }
    f->ybar = intercept ? ysum / m : 0;

    /* the active columns (spread in these rows) and their centres */
    size_t q = 0;
    for (size_t j = 0; j < p; j++) {
        if (f->role[j] != ROLE_ACTIVE)
            continue;
        if (intercept ? lo[j] == hi[j] : lo[j] == 0 && hi[j] == 0) {
            f->role[j] = ROLE_IDLE;
            continue;
        }
        f->col[q] = j;
        f->center[q] = intercept ? sum[j] / m : 0;
        f->scale[q] = 0;
        q++;
    }
    f->q = q;

    /* pass 2: squared deviations from the centre (two-pass, so no
     * cancellation between large sums of squares), blocked as pass 1 */
    for (size_t k0 = 0; k0 < m; k0 += RIDGE_BLOCK) {
        size_t b = m - k0 < RIDGE_BLOCK ? m - k0 : RIDGE_BLOCK;
        for (size_t a = 0; a < q; a++) {
            size_t j = f->col[a];
            long double c = f->center[a], ss = 0;
            for (size_t k = k0; k < k0 + b; k++) {
                long double dv = X[row_at(rows, k) * p + j] - c;
                ss += dv * dv;
            }
            f->scale[a] += ss;
        }
    }
    for (size_t a = 0; a < q; a++)
        f->scale[a] = sqrtl(f->scale[a] / m);
    free(sum);
    free(lo);
    free(hi);
    return RF_OK;
}

/* Step 2 (and 3 when pen > 0): the upper triangle of the QR factorization
 * of [Z y_c] with the block [pen I 0] appended, into S ((q+1) x (q+1),
 * row-major, zeroed by the caller). A (RIDGE_BLOCK x (q+1)) and T
 * ((q+1) x (q+1)) are workspace. Returns 0, or -1 when GSL fails. */
static int factor(const frame *f, const long double *X, const long double *y,
                  const size_t *rows, double pen, double *S, double *A,
                  double *T)
{
    size_t q = f->q, w = q + 1, p = f->p;
    gsl_matrix_view Sv = gsl_matrix_view_array(S, w, w);
    gsl_matrix_view Tv = gsl_matrix_view_array(T, w, w);
    /* times 1/s_j in long double rather than a division per value: within
     * two units of the last place of a long double, far below the double
     * the value is rounded to */
    long double inv[LINEAR_RANK_MAX];
    for (size_t k = 0; k < q; k++)
        inv[k] = 1 / f->scale[k];
    for (size_t k0 = 0; k0 < f->m; k0 += RIDGE_BLOCK) {
        size_t b = f->m - k0 < RIDGE_BLOCK ? f->m - k0 : RIDGE_BLOCK;
        /* a column at a time, so its centre and scale stay in registers */
        for (size_t k = 0; k < q; k++) {
            size_t j = f->col[k];
            long double c = f->center[k], s = inv[k];
            for (size_t a = 0; a < b; a++)
                A[a * w + k] = (double)((X[row_at(rows, k0 + a) * p + j] - c)
                                        * s);
        }
        for (size_t a = 0; a < b; a++)
            A[a * w + q] = (double)(y[row_at(rows, k0 + a)] - f->ybar);
        gsl_matrix_view Av = gsl_matrix_view_array(A, b, w);
        if (gsl_linalg_QR_UR_decomp(&Sv.matrix, &Av.matrix, &Tv.matrix))
            return -1;
    }
    if (pen > 0) {
        memset(A, 0, q * w * sizeof *A);
        for (size_t k = 0; k < q; k++)
            A[k * w + k] = pen;
        gsl_matrix_view Av = gsl_matrix_view_array(A, q, w);
        if (gsl_linalg_QR_UR_decomp(&Sv.matrix, &Av.matrix, &Tv.matrix))
            return -1;
    }
    return 0;
}

/* The standardized coefficients g (q) back on the original scale into
 * beta (p). */
static void to_beta(const frame *f, const double *g, double *beta)
{
    long double b0 = f->ybar;
    for (size_t j = 0; j < f->p; j++)
        beta[j] = f->role[j] == ROLE_DROPPED ? NAN : 0.0;
    for (size_t k = 0; k < f->q; k++) {
        long double b = g[k] / f->scale[k];
        beta[f->col[k]] = (double)b;
        b0 -= b * f->center[k];
    }
    if (f->intercept)
        beta[0] = (double)b0;
}

rf_status ridge_fit(const long double *X, const long double *y, size_t n,
                    size_t p, int intercept, const linear_drop *drop,
                    double lambda, double *beta, rf_error *err)
{
    rf_status st = check_lambda(lambda, err);
    if (st != RF_OK)
        return st;
    frame f;
    st = frame_init(&f, X, y, n, p, intercept, drop, NULL, n, err);
    if (st != RF_OK)
        return st;
    if (f.q == 0) {
        to_beta(&f, NULL, beta);
        frame_free(&f);
        return RF_OK;
    }

    size_t q = f.q, w = q + 1;
    double *S = calloc(w * w, sizeof *S);
    double *T = malloc(w * w * sizeof *T);
    double *A = malloc(RIDGE_BLOCK * w * sizeof *A);
    double *g = malloc(3 * w * sizeof *g);  /* rcond's workspace, then g */
    st = RF_ENOMEM;
    if (S == NULL || T == NULL || A == NULL || g == NULL)
        goto fail;
    if (factor(&f, X, y, NULL, sqrt(lambda), S, A, T)) {
        st = error_set(err, RF_ESYSTEM, NULL, "QR factorization failed");
        goto fail;
    }

    /* R g = c, R the leading q x q triangle of S, c its last column. A
     * triangle this close to singular would give digits of rounding, not
     * of the data (Golub & Van Loan, sec. 3.5.4). */
    gsl_matrix_view R = gsl_matrix_view_array_with_tda(S, q, q, w);
    gsl_vector_view gv = gsl_vector_view_array(g, 3 * q);
    double rcond = 0;
    int bad = gsl_linalg_tri_upper_rcond(&R.matrix, &rcond, &gv.vector);
    for (size_t k = 0; k < q; k++)
        bad |= S[k * w + k] == 0;
    if (bad || !(rcond >= RIDGE_RANK_TOL)) {
        st = error_set(err, RF_EINPUT, NULL,
                       "the terms are collinear in the fitted rows and a "
                       "ridge penalty of %g does not separate them "
                       "(reciprocal condition %.3g)", lambda, rcond);
        goto fail;
    }
    for (size_t k = 0; k < q; k++)
        g[k] = S[k * w + q];
    gsl_vector_view c = gsl_vector_view_array(g, q);
    if (gsl_blas_dtrsv(CblasUpper, CblasNoTrans, CblasNonUnit, &R.matrix,
                       &c.vector)) {
        st = error_set(err, RF_ESYSTEM, NULL, "triangular solve failed");
        goto fail;
    }
    to_beta(&f, g, beta);
    st = RF_OK;
fail:
    if (st == RF_ENOMEM)
        error_nomem(err, "ridge fit");
    free(S);
    free(T);
    free(A);
    free(g);
    frame_free(&f);
    return st;
}

void ridge_path_free(ridge_path *r)
{
    if (r == NULL)
        return;
    frame_free(&r->f);
    free(r->V);
    free(r->d);
    free(r->u);
    free(r);
}

rf_status ridge_path_create(const long double *X, const long double *y,
                            size_t n, size_t p, int intercept,
                            const linear_drop *drop, const size_t *rows,
                            size_t n_rows, ridge_path **out, rf_error *err)
{
    *out = NULL;
    ridge_path *r = calloc(1, sizeof *r);
    if (r == NULL)
        return error_nomem(err, "ridge path");
    rf_status st = frame_init(&r->f, X, y, n, p, intercept, drop, rows,
                              n_rows, err);
    if (st != RF_OK) {
        free(r);
        return st;
    }
    size_t q = r->f.q, w = q + 1;
    double *S = NULL, *T = NULL, *A = NULL;
    st = RF_ENOMEM;
    /* q may be 0 (only the intercept has spread): then nothing to factor,
     * and every lambda gives the same fit */
    r->V = malloc((q * q + 1) * sizeof *r->V);
    r->d = malloc(w * sizeof *r->d);
    r->u = malloc(w * sizeof *r->u);
    S = calloc(w * w, sizeof *S);
    T = malloc(w * w * sizeof *T);
    A = malloc(RIDGE_BLOCK * w * sizeof *A);
    if (r->V == NULL || r->d == NULL || r->u == NULL || S == NULL
        || T == NULL || A == NULL)
        goto fail;
    if (q > 0) {
        if (factor(&r->f, X, y, rows, 0, S, A, T)) {
            st = error_set(err, RF_ESYSTEM, NULL, "QR factorization failed");
            goto fail;
        }
        /* R (q x q) into T, whose rows are q+1 wide, as the U of the SVD;
         * c = Q'y_c from S's last column */
        gsl_matrix_view U = gsl_matrix_view_array(T, q, q);
        for (size_t a = 0; a < q; a++)
            for (size_t b = 0; b < q; b++)
                gsl_matrix_set(&U.matrix, a, b, b >= a ? S[a * w + b] : 0.0);
        gsl_matrix_view V = gsl_matrix_view_array(r->V, q, q);
        gsl_vector_view d = gsl_vector_view_array(r->d, q);
        gsl_vector_view work = gsl_vector_view_array(A, q);
        if (gsl_linalg_SV_decomp(&U.matrix, &V.matrix, &d.vector,
                                 &work.vector)) {
            st = error_set(err, RF_ESYSTEM, NULL,
                           "singular value decomposition failed");
            goto fail;
        }
        for (size_t l = 0; l < q; l++) {
            double s = 0;
            for (size_t a = 0; a < q; a++)
                s += gsl_matrix_get(&U.matrix, a, l) * S[a * w + q];
            r->u[l] = s;
        }
    }
    st = RF_OK;
    *out = r;
    r = NULL;
fail:
    if (st == RF_ENOMEM)
        error_nomem(err, "ridge path");
    free(S);
    free(T);
    free(A);
    ridge_path_free(r);
    return st;
}

/* d / (d^2 + lambda), the filter factor of one singular value over it
 * (ESL, eq. 3.47); at lambda 0 a direction below the rank tolerance is
 * left out, as a pseudo-inverse does. */
static double filter(const ridge_path *r, size_t l, double lambda)
{
    double d = r->d[l];
    if (lambda == 0)
        return d > RIDGE_RANK_TOL * r->d[0] ? 1 / d : 0;
    return d / (d * d + lambda);
}

rf_status ridge_path_solve(const ridge_path *r, double lambda, double *beta,
                           rf_error *err)
{
    rf_status st = check_lambda(lambda, err);
    if (st != RF_OK)
        return st;
    size_t q = r->f.q;
    double g[LINEAR_RANK_MAX], phi[LINEAR_RANK_MAX];
    for (size_t l = 0; l < q; l++)
        phi[l] = filter(r, l, lambda) * r->u[l];
    for (size_t k = 0; k < q; k++) {
        double s = 0;
        for (size_t l = 0; l < q; l++)
            s += r->V[k * q + l] * phi[l];
        g[k] = s;
    }
    to_beta(&r->f, g, beta);
    return RF_OK;
}

double ridge_path_df(const ridge_path *r, double lambda)
{
    if (!isfinite(lambda) || lambda < 0)
        return NAN;
    double df = r->f.intercept ? 1 : 0;
    for (size_t l = 0; l < r->f.q; l++)
        df += filter(r, l, lambda) * r->d[l];
    return df;
}

size_t ridge_path_rows(const ridge_path *r)
{
    return r->f.m;
}

void ridge_grid(size_t n, double *grid)
{
    grid[0] = 0;
    for (size_t k = 1; k < RIDGE_GRID; k++) {
        double e = RIDGE_GRID_LOW + (RIDGE_GRID_HIGH - RIDGE_GRID_LOW)
                   * (double)(k - 1) / (RIDGE_GRID - 2);
        grid[k] = (double)n * pow(10.0, e);
    }
}
