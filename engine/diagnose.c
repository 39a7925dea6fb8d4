/*
 * diagnose.c: regression diagnostics (see diagnose.h).
 *
 * Leverage comes from the R factor each model keeps (linear_leverage,
 * logistic_leverage): h_i = ||R^-T x_i||^2 by forward substitution, O(p^2)
 * a row, never the n x n hat matrix nor an inverse of X'X. The deleted
 * residual variance of the studentized residual uses the closed form
 * (n-p-1) s_(i)^2 = (n-p) s^2 - e_i^2 / (1 - h_i) rather than n refits
 * (Belsley, Kuh & Welsch, Regression Diagnostics, 1980, ch. 2; it follows
 * from the Sherman-Morrison formula for deleting one row).
 *
 * VIF: with A the kept non-intercept columns of X, centred when the model
 * has an intercept (uncentred without), each scaled to unit length:
 * [(A'A)^-1]_jj = 1 / RSS_j, RSS_j the residual sum of squares of a_j on
 * the other columns, and 1 - R_j^2 = RSS_j / ||a_j||^2, so
 * VIF_j = ||a_j||^2 [(A'A)^-1]_jj (Montgomery, Peck & Vining, sec. 9.4). (A'A)^-1 = R^-1 R^-T from
 * Householder QR with column pivoting of A (GSL gsl_linalg_QRPT_decomp,
 * linear_cov_from_r), never from A'A itself, whose forming would square
 * the condition number.
 */
#include "diagnose.h"

#include <float.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_blas.h>
#include <gsl/gsl_linalg.h>
#include <gsl/gsl_matrix.h>
#include <gsl/gsl_permutation.h>
#include <gsl/gsl_vector.h>

/* s_(i)^2 at or below this share of s^2 is rounding of a zero: the other
 * rows are fitted exactly, and t_i is infinite. The difference RSS -
 * e_i^2/(1-h_i) cancels to about 1e-15 RSS / (1 - h_i); 1e-10 leaves
 * room for 1 - h_i down to 1e-5 before noise could pass for a value. */
#define DELETED_VAR_ZERO 1e-10

void diagnose_free(diagnose_result *d)
{
    if (d == NULL)
        return;
    free(d->leverage);
    free(d->student);
    free(d->cooks);
    free(d->pearson);
    free(d->deviance);
    free(d->flag);
    free(d);
}

static diagnose_result *result_alloc(size_t n, size_t p, int logistic)
{
    diagnose_result *d = calloc(1, sizeof *d);
    if (d == NULL)
        return NULL;
    size_t nn = n ? n : 1;
    d->n = n;
    d->p = p;
    d->leverage = malloc(nn * sizeof *d->leverage);
    d->student = malloc(nn * sizeof *d->student);
    d->cooks = malloc(nn * sizeof *d->cooks);
    d->flag = calloc(nn, sizeof *d->flag);
    if (logistic) {
        d->pearson = malloc(nn * sizeof *d->pearson);
        d->deviance = malloc(nn * sizeof *d->deviance);
    }
    if (!d->leverage || !d->student || !d->cooks || !d->flag
        || (logistic && (!d->pearson || !d->deviance))) {
        diagnose_free(d);
        return NULL;
    }
    d->leverage_cut = 2.0 * (double)p / (double)n;
    d->student_cut = DIAGNOSE_STUDENT_CUT;
    d->cooks_cut = 4.0 / (double)n;
    return d;
}

/* Sets the flags of every row from the values and counts them. NaN
 * compares false, so an undefined value never flags. */
static void flag_rows(diagnose_result *d)
{
    memset(d->n_flagged, 0, sizeof d->n_flagged);
    for (size_t i = 0; i < d->n; i++) {
        unsigned f = 0;
        if (d->leverage[i] > d->leverage_cut)
            f |= DIAGNOSE_HIGH_LEVERAGE;
        if (fabs(d->student[i]) > d->student_cut)
            f |= DIAGNOSE_OUTLIER;
        if (d->cooks[i] > d->cooks_cut)
            f |= DIAGNOSE_INFLUENTIAL;
        d->flag[i] = f;
        for (int b = 0; b < DIAGNOSE_FLAGS; b++)
            d->n_flagged[b] += (f >> b) & 1u;
    }
}

rf_status diagnose_linear(const linear_model *m, const long double *X,
                          diagnose_result **out, rf_error *err)
{
    *out = NULL;
    size_t n = m->n, p = m->p, k = m->rank;
    diagnose_result *d = result_alloc(n, k, 0);
    if (d == NULL)
        return error_nomem(err, NULL);
    double rss = m->rss;
    double dfr = (double)n - (double)k;   /* >= 1: linear_fit's rule */
    double dfx = dfr - 1;                 /* of the deleted variance */
    double s2 = rss / dfr;
    for (size_t i = 0; i < n; i++) {
        double h = linear_leverage(m, X + i * p);
        double e = m->residual[i], one = 1 - h;
        double t = NAN, cd = NAN;
        if (one > DIAGNOSE_LEVERAGE_ONE && rss > 0) {
            cd = e * e * h / ((double)k * s2 * one * one);
            if (dfx > 0) {
                double s2i = (rss - e * e / one) / dfx;
                if (s2i > DELETED_VAR_ZERO * s2)
                    t = e / sqrt(s2i * one);
                else if (e != 0)
                    t = copysign(INFINITY, e);
            }
        }
        d->leverage[i] = h;
        d->student[i] = t;
        d->cooks[i] = cd;
    }
    flag_rows(d);
    *out = d;
    return RF_OK;
}

/* log(1 + e^t) without overflow or loss for large |t| (as logistic.c). */
static long double softplus(long double t)
{
    return (t > 0 ? t : 0) + log1pl(expl(-fabsl(t)));
}

rf_status diagnose_logistic(const logistic_model *m, const long double *X,
                            const double *y, diagnose_result **out,
                            rf_error *err)
{
    *out = NULL;
    size_t n = m->n, p = m->p, k = m->rank;
    diagnose_result *d = result_alloc(n, k, 1);
    if (d == NULL)
        return error_nomem(err, NULL);
    for (size_t i = 0; i < n; i++) {
        const long double *x = X + i * p;
        long double eta = 0;
        for (size_t j = 0; j < p; j++)
            if (m->drop[j] == LINEAR_KEPT)
                eta += m->beta[j] * x[j];
        /* p and 1 - p each from its own exponential, so neither loses
         * digits near 0 or 1; r = sqrt((1-p)/p) for y = 1 and
         * -sqrt(p/(1-p)) for y = 0 is (y - p)/sqrt(p(1-p)) without the
         * subtraction; -ln p = softplus(-eta), -ln(1-p) = softplus(eta) */
        long double pi = 1 / (1 + expl(-eta)), qi = 1 / (1 + expl(eta));
        int one_class = y[i] > 0.5;
        double r = (double)(one_class ? sqrtl(qi / pi) : -sqrtl(pi / qi));
        double dev = (double)(one_class ? sqrtl(2 * softplus(-eta))
                                        : -sqrtl(2 * softplus(eta)));
        double h = logistic_leverage(m, x);
        double one = 1 - h, t = NAN, cd = NAN;
        if (one > DIAGNOSE_LEVERAGE_ONE) {
            t = r / sqrt(one);
            cd = r * r * h / ((double)k * one * one);
        }
        d->pearson[i] = r;
        d->deviance[i] = dev;
        d->leverage[i] = h;
        d->student[i] = t;
        d->cooks[i] = cd;
    }
    flag_rows(d);
    *out = d;
    return RF_OK;
}

void diagnose_flag_text(unsigned flag, char *buf, size_t n)
{
    static const char *const word[DIAGNOSE_FLAGS] = {
        "high leverage", "outlier", "influential"
    };
    if (n == 0)
        return;
    buf[0] = '\0';
    size_t len = 0;
    for (int b = 0; b < DIAGNOSE_FLAGS; b++) {
        if (!((flag >> b) & 1u))
            continue;
        const char *parts[2] = { len ? "; " : "", word[b] };
        for (int a = 0; a < 2; a++)
            for (const char *c = parts[a]; *c && len + 1 < n; c++)
                buf[len++] = *c;
        buf[len] = '\0';
    }
}

rf_status diagnose_vif(const long double *X, size_t n, size_t p,
                       int intercept, const linear_drop *drop, double *vif,
                       rf_error *err)
{
    for (size_t j = 0; j < p; j++)
        vif[j] = NAN;
    rf_status st = RF_ENOMEM;
    size_t *col = malloc((p ? p : 1) * sizeof *col);
    long double *mean = malloc((p ? p : 1) * sizeof *mean);
    gsl_matrix *A = NULL;
    gsl_vector *tau = NULL, *norm = NULL;
    gsl_permutation *perm = NULL;
    double *cov = NULL, *len2 = NULL;
    if (col == NULL || mean == NULL)
        goto fail;

    /* the columns that take part: kept, not the intercept, not constant
     * (a constant has no R^2 with an intercept; it is dropped as constant
     * by the fit anyway) */
    size_t k = 0;
    for (size_t j = 0; j < p; j++) {
        if (drop[j] != LINEAR_KEPT || (intercept && j == 0))
            continue;
        long double s = 0;
        for (size_t i = 0; i < n; i++)
            s += X[i * p + j];
        long double mu = intercept ? s / n : 0, ss = 0;
        for (size_t i = 0; i < n; i++)
            ss += (X[i * p + j] - mu) * (X[i * p + j] - mu);
        if (!(ss > 0))
            continue;
        col[k] = j;
        mean[k++] = mu;
    }
    /* fewer than two terms: nothing to regress on; fewer rows than
     * columns: the columns are dependent (never after a fit) */
    if (k < 2 || n < k + 1) {
        st = RF_OK;
        goto fail;
    }

    A = gsl_matrix_alloc(n, k);
    tau = gsl_vector_alloc(k);
    norm = gsl_vector_alloc(k);
    perm = gsl_permutation_alloc(k);
    cov = malloc(k * k * sizeof *cov);
    len2 = malloc(k * sizeof *len2);
    if (A == NULL || tau == NULL || norm == NULL || perm == NULL
        || cov == NULL || len2 == NULL)
        goto fail;
    /* centred in extended precision, then scaled to unit length so the
     * pivoting does not depend on units; ||a_j||^2 of the stored doubles
     * enters the formula, so the scale need not be exact */
    for (size_t c = 0; c < k; c++) {
        long double ss = 0;
        for (size_t i = 0; i < n; i++) {
            long double v = X[i * p + col[c]] - mean[c];
            ss += v * v;
        }
        long double inv = 1 / sqrtl(ss);
        for (size_t i = 0; i < n; i++)
            gsl_matrix_set(A, i, c,
                           (double)((X[i * p + col[c]] - mean[c]) * inv));
    }
    for (size_t c = 0; c < k; c++) {
        gsl_vector_const_view a = gsl_matrix_const_column(A, c);
        double nrm = gsl_blas_dnrm2(&a.vector);
        len2[c] = nrm * nrm;
    }
    int signum;
    if (gsl_linalg_QRPT_decomp(A, tau, perm, &signum, norm)) {
        st = error_set(err, RF_ESYSTEM, NULL, "QR factorization failed");
        goto fail;
    }
    int singular = 0;
    for (size_t a = 0; a < k; a++)
        singular |= gsl_matrix_get(A, a, a) == 0;
    if (singular) {
        /* exactly dependent after centring (a drop[] not from the fit):
         * R_j^2 = 1 somewhere, and which terms share it is not asked */
        for (size_t c = 0; c < k; c++)
            vif[col[c]] = INFINITY;
        st = RF_OK;
        goto fail;
    }
    if (linear_cov_from_r(A, k, cov))
        goto fail;  /* no memory: R is not singular */
    for (size_t a = 0; a < k; a++) {
        size_t c = gsl_permutation_get(perm, a);
        vif[col[c]] = len2[c] * cov[a * k + a];
    }
    st = RF_OK;
fail:
    if (st == RF_ENOMEM)
        error_nomem(err, NULL);
    free(col);
    free(mean);
    gsl_matrix_free(A);
    gsl_vector_free(tau);
    gsl_vector_free(norm);
    gsl_permutation_free(perm);
    free(cov);
    free(len2);
    return st;
}
