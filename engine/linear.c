/*
 * linear.c: ordinary least squares (see linear.h).
 *
 * Method, in order:
 *  1. Scale each column of X to unit 2-norm by a power of two (exact), so the
 *     rank decision and the pivoting do not depend on units.
 *  2. Householder QR with column pivoting (GSL gsl_linalg_QRPT_decomp;
 *     Golub & Van Loan, Matrix Computations, 4th ed., sec. 5.4.1) gives the
 *     numerical rank: |R_kk| > LINEAR_RANK_TOL * |R_11|.
 *  3. When the rank is short, the terms to drop are chosen in job order: a
 *     term is kept when it raises the rank of the terms kept before it, so
 *     `x2 = 2*x` drops x2, never x. Each dropped term is explained.
 *  4. The kept columns are factored again, and the solution, the residuals
 *     and each column of (A'A)^-1 are improved by iterative refinement of the
 *     augmented system [I A; A' 0][r; x] = [b; c] with residuals accumulated
 *     in extended precision (long double): Bjorck, "Iterative refinement of
 *     linear least squares solutions I", BIT 7 (1967) 257-278; Bjorck,
 *     Numerical Methods for Least Squares Problems, SIAM 1996, sec. 2.9.
 *     Each correction reuses the QR factors, O(n p) per step.
 *  5. Measures from the refined residuals; distributions from GSL.
 */
#include "linear.h"

#include <float.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_cdf.h>
#include <gsl/gsl_linalg.h>
#include <gsl/gsl_matrix.h>
#include <gsl/gsl_permutation.h>
#include <gsl/gsl_vector.h>

#define REFINE_MAX 12  /* refinement steps; it converges in 2-4 when it can */
#define REFINE_STALL_OK 1e-13  /* last relative correction still counted as converged */
/* Condition number past which the covariance from R alone may lose more
 * than about 4 of its 16 digits, so its columns are refined too. */
#define COV_REFINE_COND 1e4
#define EXACT_FIT_ULPS 16  /* residual size, in ulps of y, that counts as 0 */

/* Workspace of one factorization of the kept columns. */
typedef struct qrfac {
    size_t n, r;
    gsl_matrix *QR;          /* n x r */
    gsl_vector *tau;         /* r */
    gsl_permutation *perm;   /* r: pivoted column k is kept column perm[k] */
    size_t *col;             /* r: design column of pivoted column k */
    gsl_vector *h;           /* n, scratch */
    long double *f, *g;      /* n and r: extended residuals */
    double *dr, *dx, *d1;    /* corrections */
} qrfac;

static void qrfac_free(qrfac *q)
{
    if (q == NULL)
        return;
    gsl_matrix_free(q->QR);
    gsl_vector_free(q->tau);
    gsl_permutation_free(q->perm);
    gsl_vector_free(q->h);
    free(q->col);
    free(q->f);
    free(q->g);
    free(q->dr);
    free(q->dx);
    free(q->d1);
    free(q);
}

static qrfac *qrfac_alloc(size_t n, size_t r)
{
    qrfac *q = calloc(1, sizeof *q);
    if (q == NULL)
        return NULL;
    q->n = n;
    q->r = r;
    q->QR = gsl_matrix_alloc(n, r);
    q->tau = gsl_vector_alloc(r);
    q->perm = gsl_permutation_alloc(r);
    q->h = gsl_vector_alloc(n);
    q->col = malloc(r * sizeof *q->col);
    q->f = malloc(n * sizeof *q->f);
    q->g = malloc(r * sizeof *q->g);
    q->dr = malloc(n * sizeof *q->dr);
    q->dx = malloc(r * sizeof *q->dx);
    q->d1 = malloc(r * sizeof *q->d1);
    if (!q->QR || !q->tau || !q->perm || !q->h || !q->col || !q->f || !q->g
        || !q->dr || !q->dx || !q->d1) {
        qrfac_free(q);
        return NULL;
    }
    return q;
}

/* Factors the scaled columns cols[0..r-1] of X with column pivoting. */
static int qrfac_factor(qrfac *q, const long double *X, size_t p,
                        const double *scale, const size_t *cols)
{
    for (size_t i = 0; i < q->n; i++)
        for (size_t k = 0; k < q->r; k++)
            gsl_matrix_set(q->QR, i, k,
                           (double)(X[i * p + cols[k]] * scale[cols[k]]));
    gsl_vector *norm = gsl_vector_alloc(q->r);
    if (norm == NULL)
        return -1;
    int signum;
    int s = gsl_linalg_QRPT_decomp(q->QR, q->tau, q->perm, &signum, norm);
    gsl_vector_free(norm);
    if (s)
        return -1;
    for (size_t k = 0; k < q->r; k++)
        q->col[k] = cols[gsl_permutation_get(q->perm, k)];
    return 0;
}

static double rdiag(const qrfac *q, size_t k)
{
    return gsl_matrix_get(q->QR, k, k);
}

/* Numerical rank of a factorization relative to |R_11|. */
static size_t qrfac_rank(const qrfac *q, size_t r, double tol)
{
    double r11 = fabs(rdiag(q, 0));
    size_t k = 0;
    while (k < r && fabs(rdiag(q, k)) > tol * r11)
        k++;
    return k;
}

/* Solves the correction system [I A; A' 0][dr; dx] = [f; g] with A = QR
 * (pivoted coordinates): R' d1 = g, h = Q'f, R dx = h1 - d1,
 * dr = Q [d1; h2]. Results in q->dr (n) and q->dx (r). */
static void qrfac_correct(qrfac *q)
{
    size_t n = q->n, r = q->r;
    /* forward substitution with R' */
    for (size_t k = 0; k < r; k++) {
        long double s = q->g[k];
        for (size_t j = 0; j < k; j++)
            s -= (long double)gsl_matrix_get(q->QR, j, k) * q->d1[j];
        q->d1[k] = (double)(s / gsl_matrix_get(q->QR, k, k));
    }
    for (size_t i = 0; i < n; i++)
        gsl_vector_set(q->h, i, (double)q->f[i]);
    gsl_linalg_QR_QTvec(q->QR, q->tau, q->h);
    /* back substitution with R */
    for (size_t kk = r; kk-- > 0;) {
        long double s = (long double)gsl_vector_get(q->h, kk) - q->d1[kk];
        for (size_t j = kk + 1; j < r; j++)
            s -= (long double)gsl_matrix_get(q->QR, kk, j) * q->dx[j];
        q->dx[kk] = (double)(s / gsl_matrix_get(q->QR, kk, kk));
    }
    for (size_t k = 0; k < r; k++)
        gsl_vector_set(q->h, k, q->d1[k]);
    gsl_linalg_QR_Qvec(q->QR, q->tau, q->h);
    for (size_t i = 0; i < n; i++)
        q->dr[i] = gsl_vector_get(q->h, i);
}

/* The residuals of the augmented system, f = b - r - A x and g = c - A'r,
 * the heart of refinement: their accuracy bounds the attainable accuracy.
 * On a large-residual problem A'r cancels to nearly nothing, so it is summed
 * in quadruple precision (GCC's __float128, done in software) when the
 * problem is small enough for that to cost well under a second, and in
 * x87 extended precision (64-bit significand) otherwise. Measured on NIST
 * Wampler5: 9.4 correct digits with extended sums, 15 with quadruple. */
#define QUAD_WORK_MAX 2000000  /* n * rank up to which sums are quadruple */

#ifdef __SIZEOF_FLOAT128__
__extension__ typedef __float128 quad;
#else
typedef long double quad;  /* quadruple already where there is no __float128 */
#endif

static void residuals_quad(qrfac *q, const long double *X, size_t p,
                           const double *scale, const long double *b,
                           const long double *c, const long double *res,
                           const long double *x)
{
    size_t n = q->n, r = q->r;
    quad gq[LINEAR_RANK_MAX];
    for (size_t k = 0; k < r; k++)
        gq[k] = c ? c[k] : 0.0L;
    for (size_t i = 0; i < n; i++) {
        const long double *row = X + i * p;
        quad fi = (quad)(b ? b[i] : 0.0L) - res[i];
        for (size_t k = 0; k < r; k++) {
            quad a = (quad)(row[q->col[k]] * scale[q->col[k]]);
            fi -= a * x[k];
            gq[k] -= a * res[i];
        }
        q->f[i] = (long double)fi;
    }
    for (size_t k = 0; k < r; k++)
        q->g[k] = (long double)gq[k];
}

static void residuals_ext(qrfac *q, const long double *X, size_t p,
                          const double *scale, const long double *b,
                          const long double *c, const long double *res,
                          const long double *x)
{
    size_t n = q->n, r = q->r;
    for (size_t k = 0; k < r; k++)
        q->g[k] = c ? c[k] : 0.0L;
    for (size_t i = 0; i < n; i++) {
        const long double *row = X + i * p;
        long double fi = (b ? b[i] : 0.0L) - res[i];
        for (size_t k = 0; k < r; k++) {
            long double a = row[q->col[k]] * scale[q->col[k]];
            fi -= a * x[k];
            q->g[k] -= a * res[i];
        }
        q->f[i] = fi;
    }
}

/* Refines the solution of [I A; A' 0][r; x] = [b; c] (A the scaled, pivoted
 * kept columns; b = NULL means 0; c = NULL means 0) starting from r = x = 0.
 * r (n) and x (r, pivoted order) are outputs. Returns the steps taken, or
 * the negative of it when the corrections stopped shrinking before reaching
 * double precision. */
static int qrfac_refine(qrfac *q, const long double *X, size_t p,
                        const double *scale, const long double *b,
                        const long double *c,
                        long double *res, long double *x)
{
    size_t n = q->n, r = q->r;
    memset(res, 0, n * sizeof *res);
    memset(x, 0, r * sizeof *x);
    double prev = INFINITY, bn = 0;
    for (size_t i = 0; b && i < n; i++)
        bn = fmax(bn, fabs((double)b[i]));
    for (int step = 1; step <= REFINE_MAX; step++) {
        if (n * r <= QUAD_WORK_MAX)
            residuals_quad(q, X, p, scale, b, c, res, x);
        else
            residuals_ext(q, X, p, scale, b, c, res, x);
        qrfac_correct(q);
        double dxn = 0, xn = 0, drn = 0, rn = 0;
        for (size_t k = 0; k < r; k++) {
            x[k] += q->dx[k];
            dxn = fmax(dxn, fabs(q->dx[k]));
            xn = fmax(xn, fabs((double)x[k]));
        }
        for (size_t i = 0; i < n; i++) {
            res[i] += q->dr[i];
            drn = fmax(drn, fabs(q->dr[i]));
            rn = fmax(rn, fabs((double)res[i]));
        }
        rn = fmax(rn, bn);
        double rel = fmax(xn > 0 ? dxn / xn : dxn, rn > 0 ? drn / rn : drn);
        if (rel <= DBL_EPSILON)
            return step;
        /* Corrections that stop shrinking at the level of a few ulps mean
         * the solution is as good as double precision holds it; stalling
         * far above that means the design is too ill-conditioned. */
        if (step > 2 && rel >= prev * 0.5)
            return rel <= REFINE_STALL_OK ? step : -step;
        prev = rel;
    }
    return -REFINE_MAX;
}

/* Rank-deficient case: keep terms in job order while each raises the rank.
 * keep[] gets the kept design columns; returns how many. */
static size_t choose_kept(const long double *X, size_t n, size_t p,
                          const double *scale, const linear_drop *pre,
                          size_t rank, size_t *keep, int *fail)
{
    size_t nk = 0;
    *fail = 0;
    for (size_t j = 0; j < p && nk < rank; j++) {
        if (pre[j] != LINEAR_KEPT)
            continue;
        keep[nk] = j;
        qrfac *q = qrfac_alloc(n, nk + 1);
        if (q == NULL || qrfac_factor(q, X, p, scale, keep)) {
            qrfac_free(q);
            *fail = 1;
            return 0;
        }
        if (qrfac_rank(q, nk + 1, LINEAR_RANK_TOL) == nk + 1)
            nk++;
        qrfac_free(q);
    }
    return nk;
}

/* For a dropped column j, the kept terms that make it up: least squares of
 * column j on the kept columns; terms whose share of the fit is not
 * negligible, largest first. */
static void explain_collinear(const qrfac *q, const long double *X, size_t p,
                              const double *scale, size_t j, size_t *with,
                              size_t *n_with, double *work_n, double *coef)
{
    size_t n = q->n, r = q->r;
    gsl_vector_view b = gsl_vector_view_array(work_n, n);
    for (size_t i = 0; i < n; i++)
        work_n[i] = (double)(X[i * p + j] * scale[j]);
    gsl_linalg_QR_QTvec(q->QR, q->tau, &b.vector);
    for (size_t kk = r; kk-- > 0;) {
        double s = work_n[kk];
        for (size_t m = kk + 1; m < r; m++)
            s -= gsl_matrix_get(q->QR, kk, m) * coef[m];
        coef[kk] = s / gsl_matrix_get(q->QR, kk, kk);
    }
    /* columns are unit length, so |coef| is each term's share */
    *n_with = 0;
    for (size_t t = 0; t < LINEAR_WITH_MAX; t++) {
        size_t best = r;
        double bv = 1e-6;
        for (size_t k = 0; k < r; k++)
            if (fabs(coef[k]) > bv) {
                bv = fabs(coef[k]);
                best = k;
            }
        if (best == r)
            break;
        with[(*n_with)++] = q->col[best];
        coef[best] = 0;
    }
}

void linear_free(linear_model *m)
{
    if (m == NULL)
        return;
    free(m->beta);
    free(m->se);
    free(m->t);
    free(m->pvalue);
    free(m->low);
    free(m->high);
    free(m->drop);
    free(m->with);
    free(m->n_with);
    free(m->residual);
    free(m->R);
    free(m->cols);
    free(m->scale);
    free(m);
}

static linear_model *model_alloc(size_t n, size_t p)
{
    linear_model *m = calloc(1, sizeof *m);
    if (m == NULL)
        return NULL;
    m->beta = malloc(p * sizeof *m->beta);
    m->se = malloc(p * sizeof *m->se);
    m->t = malloc(p * sizeof *m->t);
    m->pvalue = malloc(p * sizeof *m->pvalue);
    m->low = malloc(p * sizeof *m->low);
    m->high = malloc(p * sizeof *m->high);
    m->drop = calloc(p, sizeof *m->drop);
    m->with = calloc(p * LINEAR_WITH_MAX, sizeof *m->with);
    m->n_with = calloc(p, sizeof *m->n_with);
    m->residual = malloc(n * sizeof *m->residual);
    m->R = calloc(p * p, sizeof *m->R);
    m->cols = calloc(p, sizeof *m->cols);
    m->scale = malloc(p * sizeof *m->scale);
    if (!m->beta || !m->se || !m->t || !m->pvalue || !m->low || !m->high
        || !m->drop || !m->with || !m->n_with || !m->residual || !m->R
        || !m->cols || !m->scale) {
        linear_free(m);
        return NULL;
    }
    for (size_t j = 0; j < p; j++)
        m->beta[j] = m->se[j] = m->t[j] = m->pvalue[j] = m->low[j] =
            m->high[j] = NAN;
    return m;
}

/* Condition number estimate of the scaled kept design: 1-norm of R times
 * the 1-norm of R^-1 (GSL's triangular estimate). */
static double cond_estimate(const qrfac *q)
{
    gsl_vector *work = gsl_vector_alloc(3 * q->r);
    if (work == NULL)
        return NAN;
    gsl_matrix_const_view R = gsl_matrix_const_submatrix(q->QR, 0, 0, q->r, q->r);
    double rcond = NAN;
    if (gsl_linalg_tri_upper_rcond(&R.matrix, &rcond, work))
        rcond = NAN;
    gsl_vector_free(work);
    return rcond > 0 ? 1.0 / rcond : INFINITY;
}

/* Residuals of the coefficients in m->beta (rounded to double, summed in
 * extended precision) and every fit measure that follows from them. */
static void residual_measures(linear_model *m, const long double *X,
                              const long double *y)
{
    size_t n = m->n, p = m->p, rank = m->rank;
    int intercept = m->intercept;
    double level = m->level;
    /* residuals of the rounded coefficients, in extended precision */
    long double rss = 0, sae = 0, sy = 0;
    for (size_t i = 0; i < n; i++) {
        long double e = y[i];
        for (size_t j = 0; j < p; j++)
            if (m->drop[j] == LINEAR_KEPT)
                e -= X[i * p + j] * m->beta[j];
        m->residual[i] = (double)e;
        rss += e * e;
        sae += fabsl(e);
        sy += y[i];
    }
    long double tss = 0, yy = 0, ybar = intercept ? sy / n : 0;
    for (size_t i = 0; i < n; i++) {
        tss += (y[i] - ybar) * (y[i] - ybar);
        yy += y[i] * y[i];
    }
    /* An exact fit leaves residuals at the rounding level of y (1e-46 on a
     * line through its points), and a t of 1e46 from them is noise: below
     * (EXACT_FIT_ULPS ulps of y)^2 the fit is exact, and says so. */
    if (rss <= yy * (EXACT_FIT_ULPS * DBL_EPSILON) * (EXACT_FIT_ULPS * DBL_EPSILON))
        rss = sae = 0;

    /* measures */
    double dfr = (double)(n - rank);
    double dfm = (double)(intercept ? rank - 1 : rank);
    m->df_resid = dfr;
    m->df_model = dfm;
    m->rss = (double)rss;
    m->tss = (double)tss;
    m->sigma = sqrt((double)(rss / dfr));
    m->rmse = sqrt((double)(rss / n));
    m->mae = (double)(sae / n);
    m->r2 = tss > 0 ? (double)(1 - rss / tss) : NAN;
    m->adj_r2 = tss > 0 ? (double)(1 - (rss / dfr) / (tss / (n - (intercept ? 1 : 0))))
                        : NAN;
    if (dfm > 0 && tss > 0) {
        long double msr = (tss - rss) / dfm, mse = rss / dfr;
        m->fstat = mse > 0 ? (double)(msr / mse) : INFINITY;
        m->fpvalue = isfinite(m->fstat) ? gsl_cdf_fdist_Q(m->fstat, dfm, dfr)
                                        : NAN;
    } else {
        m->fstat = m->fpvalue = NAN;
    }
    /* Gaussian log-likelihood at the ML variance RSS/n; k counts the
     * variance as a parameter (Akaike 1974; Schwarz 1978). */
    double kpar = (double)rank + 1;
    m->loglik = rss > 0 ? -0.5 * n * (log(2 * 3.14159265358979323846 * (double)(rss / n)) + 1)
                        : INFINITY;
    m->aic = -2 * m->loglik + 2 * kpar;
    m->bic = -2 * m->loglik + kpar * log((double)n);
    m->tcrit = gsl_cdf_tdist_Qinv((1 - level) / 2, dfr);

}

/* (A'A)^-1 = R^-1 R^-T in pivoted order into cov (r x r). */
static int covariance_from_r(const qrfac *q, double *cov)
{
    return linear_cov_from_r(q->QR, q->r, cov);
}

int linear_cov_from_r(const gsl_matrix *QR, size_t r, double *cov)
{
    gsl_matrix *Ri = gsl_matrix_alloc(r, r);
    if (Ri == NULL)
        return -1;
    for (size_t a = 0; a < r; a++)
        for (size_t b = 0; b < r; b++)
            gsl_matrix_set(Ri, a, b, b >= a ? gsl_matrix_get(QR, a, b) : 0);
    if (gsl_linalg_tri_upper_invert(Ri)) {
        gsl_matrix_free(Ri);
        return -1;
    }
    for (size_t a = 0; a < r; a++)
        for (size_t b = 0; b < r; b++) {
            long double s = 0;
            for (size_t k = (a > b ? a : b); k < r; k++)
                s += (long double)gsl_matrix_get(Ri, a, k) * gsl_matrix_get(Ri, b, k);
            cov[a * r + b] = (double)s;
        }
    gsl_matrix_free(Ri);
    return 0;
}

rf_status linear_fit(const long double *X, const long double *y, size_t n, size_t p,
                     int intercept, double level, linear_model **out,
                     rf_error *err)
{
    *out = NULL;
    if (linear_terms_check(p, err))
        return err->status;
    if (n < p + 1)
        return error_set(err, RF_EINPUT, NULL,
                         "only %zu usable rows for %zu terms: a linear fit "
                         "needs at least one row more than it has terms",
                         n, p);
    for (size_t i = 0; i < n; i++) {
        if (!isfinite((double)y[i]))
            return error_set(err, RF_EINPUT, NULL,
                             "fitted row %zu has a non-finite target", i + 1);
        for (size_t j = 0; j < p; j++)
            if (!isfinite((double)X[i * p + j]))
                return error_set(err, RF_EINPUT, NULL,
                                 "fitted row %zu has a non-finite input", i + 1);
    }

    rf_status st = RF_ENOMEM;
    qrfac *q = NULL;
    double *work_n = NULL, *coef = NULL, *cov = NULL;
    long double *cvec = NULL, *zres = NULL, *xs = NULL, *res = NULL;
    size_t *keep = NULL;
    linear_model *m = model_alloc(n, p);
    if (m == NULL)
        goto fail;
    m->n = n;
    m->p = p;
    m->intercept = intercept;
    m->level = level;
    m->rank_tol = LINEAR_RANK_TOL;

    /* 1. power-of-two column scales; zero and constant columns */
    for (size_t j = 0; j < p; j++) {
        long double ss = 0, lo = X[j], hi = X[j];
        for (size_t i = 0; i < n; i++) {
            long double v = X[i * p + j];
            ss += v * v;
            lo = fminl(lo, v);
            hi = fmaxl(hi, v);
        }
        double norm = sqrtl(ss);
        if (norm == 0) {
            m->drop[j] = LINEAR_DROP_ZERO;
            m->scale[j] = 1;
        } else {
            m->scale[j] = ldexp(1.0, -ilogb(norm));
            if (intercept && j > 0 && lo == hi)
                m->drop[j] = LINEAR_DROP_CONSTANT;
        }
    }

    keep = malloc(p * sizeof *keep);
    work_n = malloc(n * sizeof *work_n);
    coef = malloc(p * sizeof *coef);
    if (keep == NULL || work_n == NULL || coef == NULL)
        goto fail;
    size_t nk = 0;
    for (size_t j = 0; j < p; j++)
        if (m->drop[j] == LINEAR_KEPT)
            keep[nk++] = j;
    if (nk == 0) {
        st = error_set(err, RF_EINPUT, NULL,
                       "every term is zero or constant in the fitted rows");
        goto fail;
    }

    /* 2. rank of the remaining columns */
    q = qrfac_alloc(n, nk);
    if (q == NULL)
        goto fail;
    if (qrfac_factor(q, X, p, m->scale, keep)) {
        st = error_set(err, RF_ESYSTEM, NULL, "QR factorization failed");
        goto fail;
    }
    size_t rank = qrfac_rank(q, nk, LINEAR_RANK_TOL);

    /* 3. drop in job order when short */
    if (rank < nk) {
        int failed;
        size_t *kept2 = malloc(p * sizeof *kept2);
        if (kept2 == NULL)
            goto fail;
        size_t nk2 = choose_kept(X, n, p, m->scale, m->drop, rank, kept2,
                                 &failed);
        if (failed || nk2 == 0) {
            free(kept2);
            goto fail;
        }
        qrfac_free(q);
        q = qrfac_alloc(n, nk2);
        if (q == NULL || qrfac_factor(q, X, p, m->scale, kept2)) {
            free(kept2);
            goto fail;
        }
        for (size_t a = 0; a < nk; a++) {
            int kept = 0;
            for (size_t b = 0; b < nk2; b++)
                kept |= kept2[b] == keep[a];
            if (!kept)
                m->drop[keep[a]] = LINEAR_DROP_COLLINEAR;
        }
        free(kept2);
        nk = nk2;
    }
    for (size_t j = 0; j < p; j++)
        if (m->drop[j] == LINEAR_DROP_COLLINEAR)
            explain_collinear(q, X, p, m->scale, j,
                              m->with + j * LINEAR_WITH_MAX, &m->n_with[j],
                              work_n, coef);
    m->rank = rank = q->r;
    m->cond = cond_estimate(q);

    /* 4. refined solution and residuals */
    xs = malloc(rank * sizeof *xs);
    res = malloc(n * sizeof *res);
    cov = malloc(rank * rank * sizeof *cov);
    cvec = calloc(rank, sizeof *cvec);
    zres = malloc(n * sizeof *zres);
    if (xs == NULL || res == NULL || cov == NULL || cvec == NULL
        || zres == NULL)
        goto fail;
    int steps = qrfac_refine(q, X, p, m->scale, y, NULL, res, xs);
    m->refine_steps = abs(steps);
    m->refine_converged = steps > 0;
    for (size_t k = 0; k < rank; k++)
        m->beta[q->col[k]] = (double)(xs[k] * m->scale[q->col[k]]);

    residual_measures(m, X, y);

    /* Covariance of the scaled coefficients, (A'A)^-1 = R^-1 R^-T. Its
     * relative error grows with the condition number, so past
     * COV_REFINE_COND each column is refined like the solution:
     * [I A; A' 0][r; z] = [0; e_k] gives z = -(A'A)^-1 e_k. */
    if (covariance_from_r(q, cov))
        goto fail;
    if (!(m->cond <= COV_REFINE_COND)) {
        for (size_t k = 0; k < rank; k++) {
            memset(cvec, 0, rank * sizeof *cvec);
            cvec[k] = 1;
            int s2 = qrfac_refine(q, X, p, m->scale, NULL, cvec, zres, xs);
            if (s2 < 0)
                m->refine_converged = 0;
            for (size_t l = 0; l < rank; l++)
                cov[l * rank + k] = (double)-xs[l];
        }
    }

    double dfr = m->df_resid;
    double s2 = m->rss / dfr;
    for (size_t k = 0; k < rank; k++) {
        size_t j = q->col[k];
        /* scale outside the root: squared, 2^-997 would underflow */
        m->se[j] = sqrt(s2 * cov[k * rank + k]) * m->scale[j];
        if (m->se[j] > 0) {
            m->t[j] = m->beta[j] / m->se[j];
            m->pvalue[j] = 2 * gsl_cdf_tdist_Q(fabs(m->t[j]), dfr);
        }
        m->low[j] = m->beta[j] - m->tcrit * m->se[j];
        m->high[j] = m->beta[j] + m->tcrit * m->se[j];
    }

    /* keep R for prediction variances */
    for (size_t a = 0; a < rank; a++)
        for (size_t b = 0; b < rank; b++)
            m->R[a * rank + b] = b >= a ? gsl_matrix_get(q->QR, a, b) : 0.0;
    for (size_t k = 0; k < rank; k++)
        m->cols[k] = q->col[k];

    st = RF_OK;
    *out = m;
    m = NULL;
fail:
    if (st == RF_ENOMEM)
        error_nomem(err, NULL);
    qrfac_free(q);
    free(keep);
    free(work_n);
    free(coef);
    free(xs);
    free(res);
    free(cov);
    free(cvec);
    free(zres);
    linear_free(m);
    return st;
}

void linear_set_beta(linear_model *m, const long double *X,
                     const long double *y, const double *beta)
{
    for (size_t j = 0; j < m->p; j++) {
        m->beta[j] = m->drop[j] == LINEAR_KEPT ? beta[j] : NAN;
        m->se[j] = m->t[j] = m->pvalue[j] = m->low[j] = m->high[j] = NAN;
    }
    residual_measures(m, X, y);
    m->tcrit = NAN;   /* no intervals: they belong to the exact solution */
}

rf_status linear_terms_check(size_t p, rf_error *err)
{
    if (p == 0)
        return error_set(err, RF_EINPUT, NULL, "the model has no terms");
    if (p > LINEAR_RANK_MAX)
        return error_set(err, RF_EINPUT, NULL,
                         "the model has %zu terms; at most %d are supported",
                         p, LINEAR_RANK_MAX);
    return RF_OK;
}

int linear_accurate_digits(const linear_model *m)
{
    /* cond * 2^-63: the extended unit roundoff of the refinement */
    double lost = m->cond * LDBL_EPSILON;
    if (!(lost > 0) || !isfinite(lost))
        return isfinite(m->cond) ? 15 : 0;
    double d = floor(-log10(lost));
    return d > 15 ? 15 : d < 0 ? 0 : (int)d;
}

/* q = R^-T (S x)_pivoted, the row of the thin Q factor of a row x (r
 * values into q): forward substitution, stable where x'(X'X)^-1 x would
 * cancel (Golub & Van Loan, Matrix Computations, 4th ed., sec. 5.3).
 * Returns |q|^2, the row's leverage. */
static long double q_row(const linear_model *m, const long double *x,
                         double *q)
{
    size_t r = m->rank;
    long double h = 0;
    for (size_t k = 0; k < r; k++) {
        long double s = x[m->cols[k]] * m->scale[m->cols[k]];
        for (size_t a = 0; a < k; a++)
            s -= (long double)m->R[a * r + k] * q[a];
        q[k] = (double)(s / m->R[k * r + k]);
        h += (long double)q[k] * q[k];
    }
    return h;
}

double linear_leverage(const linear_model *m, const long double *x)
{
    double w[LINEAR_RANK_MAX];   /* rank <= LINEAR_RANK_MAX: linear_fit */
    return (double)q_row(m, x, w);
}

/* A fold whose training rows lose a direction of the full design (a
 * category level seen only in the held-out fold): the Cholesky factor of
 * G_F = sum over training rows of q q' has a diagonal below this (G_F is
 * near I for a fold that keeps every direction), and the fold is refitted
 * instead. */
#define CV_PIVOT_MIN 1e-6

/* Leave-one-out: a leverage this close to 1 is 1 (a row that alone decides
 * a term), as diagnose.h counts it. */
#define CV_LEVERAGE_ONE 1e-10

/* The fold refitted from its own training rows: the exact answer when the
 * update cannot be trusted. */
static rf_status cv_refit(const linear_model *m, const long double *X,
                          const long double *y, const size_t *fold,
                          size_t f, double *pred, rf_error *err)
{
    size_t n = m->n, p = m->p, nt = 0;
    for (size_t i = 0; i < n; i++)
        nt += fold[i] != f;
    /* calloc: every entry is set below, but the compiler cannot see it */
    long double *Xt = calloc((nt ? nt : 1) * p, sizeof *Xt);
    long double *yt = calloc(nt ? nt : 1, sizeof *yt);
    linear_model *mt = NULL;
    rf_status st = RF_OK;
    if (Xt == NULL || yt == NULL) {
        st = error_nomem(err, NULL);
        goto out;
    }
    for (size_t i = 0, t = 0; i < n; i++)
        if (fold[i] != f) {
            memcpy(Xt + t * p, X + i * p, p * sizeof *Xt);
            yt[t++] = y[i];
        }
    if ((st = linear_fit(Xt, yt, nt, p, m->intercept, m->level, &mt, err)))
        goto out;
    for (size_t i = 0; i < n; i++)
        if (fold[i] == f) {
            long double e = 0;
            for (size_t j = 0; j < p; j++)
                if (mt->drop[j] == LINEAR_KEPT)
                    e += X[i * p + j] * mt->beta[j];
            pred[i] = (double)e;
        }
out:
    linear_free(mt);
    free(Xt);
    free(yt);
    return st;
}

rf_status linear_cv(const linear_model *m, const long double *X,
                    const long double *y, const size_t *fold, size_t k,
                    double *pred, size_t *refits, rf_error *err)
{
    size_t n = m->n, p = m->p, r = m->rank;
    *refits = 0;
    if (k < 2 || k > n)
        return error_set(err, RF_EINPUT, NULL, "cross-validation needs "
                         "between 2 and %zu folds, not %zu", n, k);
    for (size_t i = 0; i < n; i++)
        if (fold[i] >= k)
            return error_set(err, RF_EINPUT, NULL, "row %zu has fold %zu of "
                             "%zu", i + 1, fold[i], k);
    int loo = k == n;
    /* per fold: P_f = sum q q' (r x r) and u_f = sum q e (r); leave-one-
     * out needs neither (the update is e / (1 - h)) */
    size_t rr = r * r;
    double *P = loo ? NULL : calloc(k * rr, sizeof *P);
    double *u = loo ? NULL : calloc(k * r, sizeof *u);
    double *q = malloc((r ? r : 1) * sizeof *q);
    double *Q = loo ? NULL : malloc(n * (r ? r : 1) * sizeof *Q);
    gsl_matrix *G = loo || r == 0 ? NULL : gsl_matrix_alloc(r, r);
    gsl_vector *v = loo || r == 0 ? NULL : gsl_vector_alloc(r);
    unsigned char *refit = loo ? NULL : calloc(k, 1);
    rf_status st = RF_OK;
    if (q == NULL || (!loo && (P == NULL || u == NULL || Q == NULL
                               || refit == NULL
                               || (r && (G == NULL || v == NULL))))) {
        st = error_nomem(err, NULL);
        goto out;
    }
    for (size_t i = 0; i < n; i++) {
        double *qi = loo ? q : Q + i * r;
        long double h = q_row(m, X + i * p, qi);
        double e = m->residual[i];
        if (loo) {
            /* the PRESS residual e / (1 - h) (Allen, Technometrics 16
             * (1974) 125); h = 1 up to rounding: the row alone decides a
             * term, and the update would divide noise by noise, so that
             * row is refitted (after this loop) */
            if (1 - h > CV_LEVERAGE_ONE)
                pred[i] = (double)(y[i] - e / (1 - h));
            else
                pred[i] = NAN;
            continue;
        }
        double *Pf = P + fold[i] * rr, *uf = u + fold[i] * r;
        for (size_t a = 0; a < r; a++) {
            uf[a] += qi[a] * e;
            for (size_t b = 0; b <= a; b++)
                Pf[a * r + b] += qi[a] * qi[b];
        }
    }
    if (loo) {
        for (size_t i = 0; i < n && st == RF_OK; i++)
            if (isnan(pred[i])) {
                (*refits)++;
                st = cv_refit(m, X, y, fold, i, pred, err);
            }
        goto out;
    }
    /* Fold F: held-out residuals z = (I - U U')^-1 e_F, U the fold's rows
     * of Q; by the Woodbury identity z = e_F + U G^-1 U'e_F with
     * G = I - U'U = sum over the other folds' P (no cancellation: a sum of
     * positive semidefinite parts). */
    for (size_t f = 0; f < k; f++) {
        for (size_t a = 0; a < r; a++)
            for (size_t b = 0; b <= a; b++) {
                double g = 0;
                for (size_t o = 0; o < k; o++)
                    if (o != f)
                        g += P[o * rr + a * r + b];
                gsl_matrix_set(G, a, b, g);
                gsl_matrix_set(G, b, a, g);
            }
        int bad = r > 0 && gsl_linalg_cholesky_decomp1(G) != 0;
        for (size_t a = 0; a < r && !bad; a++)
            bad = !(gsl_matrix_get(G, a, a) > CV_PIVOT_MIN);
        if (bad) {
            refit[f] = 1;
            continue;
        }
        for (size_t a = 0; a < r; a++)
            gsl_vector_set(v, a, u[f * r + a]);
        if (r && gsl_linalg_cholesky_svx(G, v) != 0) {
            refit[f] = 1;
            continue;
        }
        for (size_t i = 0; i < n; i++) {
            if (fold[i] != f)
                continue;
            long double z = m->residual[i];
            for (size_t a = 0; a < r; a++)
                z += (long double)Q[i * r + a] * gsl_vector_get(v, a);
            pred[i] = (double)(y[i] - z);
        }
    }
    for (size_t f = 0; f < k && st == RF_OK; f++)
        if (refit[f]) {
            (*refits)++;
            st = cv_refit(m, X, y, fold, f, pred, err);
        }
out:
    free(P);
    free(u);
    free(q);
    free(Q);
    free(refit);
    if (G)
        gsl_matrix_free(G);
    if (v)
        gsl_vector_free(v);
    return st;
}

void linear_predict(const linear_model *m, const long double *x, double *est,
                    double *low, double *high)
{
    long double e = 0;
    for (size_t j = 0; j < m->p; j++)
        if (m->drop[j] == LINEAR_KEPT)
            e += m->beta[j] * x[j];
    *est = (double)e;
    double h = linear_leverage(m, x);
    double s2 = m->df_resid > 0 ? m->rss / m->df_resid : NAN;
    double half = m->tcrit * sqrt(s2 * (1 + h));
    *low = *est - half;
    *high = *est + half;
}
