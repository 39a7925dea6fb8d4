/*
 * logistic.c: logistic regression (see logistic.h).
 *
 * Method, in order:
 *  1. The rank decision is linear.c's own: linear_fit on X (the target does
 *     not enter it) scales each column to unit length by a power of two,
 *     decides the rank by Householder QR with column pivoting against
 *     LINEAR_RANK_TOL, and drops zero, constant and collinear terms in job
 *     order with their reasons. Calling it, rather than copying it, keeps
 *     the two models' drops identical by construction.
 *  2. Newton's method as iteratively reweighted least squares (McCullagh &
 *     Nelder, Generalized Linear Models, 2nd ed., sec. 2.5; Hosmer,
 *     Lemeshow & Sturdivant, Applied Logistic Regression, 3rd ed., ch. 1):
 *     weights w = p(1-p), working response z = eta + (y-p)/w. Each step is
 *     the weighted least squares problem min ||W^1/2 (z - X b)||, solved by
 *     Householder QR with column pivoting of the sqrt(w)-scaled rows (GSL
 *     gsl_linalg_QRPT_decomp), never the normal equations X'WX. It is solved
 *     for the step d = b_new - b, i.e. with right-hand side
 *     W^1/2 (z - eta) = (y - p) / sqrt(w), which is the same problem and
 *     does not cancel the large parts of b near convergence; the gradient
 *     X'(y - p) that decides the answer is accumulated in long double.
 *  3. Ridge: the penalized log-likelihood is
 *         loglik(b) - (ridge / 2) * sum_j (s_j b_j)^2
 *     over the non-intercept kept terms, s_j the standard deviation of
 *     column j over the fitted rows (divisor n) with an intercept, its root
 *     mean square without one (as gradient.c standardizes, so the two
 *     solvers solve one problem), so the penalty is on the coefficients of standardized
 *     inputs and does not depend on units. The Newton step of it is the
 *     WLS problem above with rows sqrt(ridge) * s_j * e_j appended
 *     (right-hand side -sqrt(ridge) * s_j * b_j).
 *  4. Step halving (common practice for Newton on a concave objective):
 *     when a step lowers the penalized log-likelihood, it is halved, up to
 *     LOGISTIC_HALVINGS_MAX times; a step that still does not improve ends
 *     the iterations (not converged).
 *  5. Convergence: |D_old - D| / (|D| + 0.1) < 1e-12, D the deviance
 *     (common practice), and max_j |d_j| / max(1, |g_j|) < 1e-10 where g
 *     and d are the coefficients and the step on the unit-length column
 *     scale of step 1. At most LOGISTIC_ITER_MAX steps.
 *  6. Separation (Albert & Anderson, Biometrika 71 (1984) 1-10): the
 *     maximum likelihood estimate does not exist, Newton's steps stay of
 *     order one while the fitted probabilities of some rows run to 0 or 1.
 *     It is declared when the iterations do not converge and some row is
 *     fitted exactly, |y - p| < SEP_EXACT: complete when every row is,
 *     quasi-complete otherwise. The iterations stop early once the deviance
 *     has stopped changing (first rule of 5) for SEP_STALL steps in a row
 *     with rows fitted exactly while the coefficients still move. The term
 *     named is the kept non-intercept term with the largest |b_j| * s_j at
 *     the last iterate: the one that moves the linear predictor most across
 *     the rows. Per-term results are then NaN, never the diverging values.
 *  7. Standard errors from the inverse Fisher information (X'WX)^-1 =
 *     R^-1 R^-T, R from the QR of the final weighted rows (no ridge rows);
 *     Wald z, normal p value, Wald interval, odds ratios (Hosmer et al.,
 *     sec. 1.4 and 3.3). With ridge > 0 they are NaN: the classical
 *     standard errors do not apply to a penalized estimate.
 *  8. The model keeps the R factor of the weighted rows at the fit (with
 *     ridge > 0, of the weighted rows and the penalty rows, so R'R is the
 *     penalized information X'WX + P) for logistic_leverage, the diagonal
 *     of the hat matrix W^1/2 X (X'WX + P)^-1 X' W^1/2 (Pregibon, "Logistic
 *     regression diagnostics", Ann. Statist. 9 (1981) 705-724; Hosmer et
 *     al., ch. 5). logistic_set_beta factors again at its coefficients.
 */
#include "logistic.h"

#include <float.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_cdf.h>
#include <gsl/gsl_linalg.h>
#include <gsl/gsl_matrix.h>
#include <gsl/gsl_permutation.h>
#include <gsl/gsl_vector.h>

#define DEV_TOL 1e-12      /* relative change of the deviance */
#define STEP_TOL 1e-10     /* largest step on the unit-length column scale */
#define SEP_EXACT 1e-10    /* |y - p| below which a row is fitted exactly */
#define SEP_STALL 5        /* steps with a still deviance before stopping */
#define W_MIN 1e-300       /* floor of the weights, so 1/sqrt(w) is finite */

/* log(1 + e^t) without overflow or loss for large |t|. */
static long double softplus(long double t)
{
    return (t > 0 ? t : 0) + log1pl(expl(-fabsl(t)));
}

/* The log-likelihood of row i: y log p + (1-y) log(1-p), p = 1/(1+e^-eta). */
static long double row_loglik(double y, long double eta)
{
    return y > 0.5 ? -softplus(-eta) : -softplus(eta);
}

/* Workspace of the iterations over the r kept columns. */
typedef struct irls {
    size_t n, p, r, rows;    /* rows = n, plus r with a penalty */
    const long double *X;
    const double *y;
    size_t *col;             /* r: design column of kept column k */
    double *c;               /* r: power-of-two column scale */
    double *pen;             /* r: sqrt(ridge) * s_j, 0 for the intercept */
    long double *eta;        /* n */
    double *g, *gnew, *d;    /* r: coefficients on the scaled columns, step */
    gsl_matrix *A;           /* rows x r */
    gsl_vector *tau, *b, *norm;
    gsl_permutation *perm;
} irls;

static void irls_free(irls *w)
{
    if (w == NULL)
        return;
    free(w->col);
    free(w->c);
    free(w->pen);
    free(w->eta);
    free(w->g);
    free(w->gnew);
    free(w->d);
    gsl_matrix_free(w->A);
    gsl_vector_free(w->tau);
    gsl_vector_free(w->b);
    gsl_vector_free(w->norm);
    gsl_permutation_free(w->perm);
    free(w);
}

static irls *irls_alloc(size_t n, size_t p, size_t r, int penalized)
{
    irls *w = calloc(1, sizeof *w);
    if (w == NULL)
        return NULL;
    w->n = n;
    w->p = p;
    w->r = r;
    w->rows = n + (penalized ? r : 0);
    w->col = malloc(r * sizeof *w->col);
    w->c = malloc(r * sizeof *w->c);
    w->pen = calloc(r, sizeof *w->pen);
    w->eta = malloc(n * sizeof *w->eta);
    w->g = calloc(r, sizeof *w->g);
    w->gnew = calloc(r, sizeof *w->gnew);
    w->d = calloc(r, sizeof *w->d);
    w->A = gsl_matrix_alloc(w->rows, r);
    w->tau = gsl_vector_alloc(r);
    w->b = gsl_vector_alloc(w->rows);
    w->norm = gsl_vector_alloc(r);
    w->perm = gsl_permutation_alloc(r);
    if (!w->col || !w->c || !w->pen || !w->eta || !w->g || !w->gnew || !w->d
        || !w->A || !w->tau || !w->b || !w->norm || !w->perm) {
        irls_free(w);
        return NULL;
    }
    return w;
}

/* eta for the coefficients g; returns the penalized log-likelihood and
 * stores the plain one in *ll. */
static long double irls_eval(irls *w, const double *g, long double *ll)
{
    long double sum = 0;
    for (size_t i = 0; i < w->n; i++) {
        const long double *row = w->X + i * w->p;
        long double e = 0;
        for (size_t k = 0; k < w->r; k++)
            e += row[w->col[k]] * w->c[k] * g[k];
        w->eta[i] = e;
        sum += row_loglik(w->y[i], e);
    }
    *ll = sum;
    long double pen = 0;
    for (size_t k = 0; k < w->r; k++)
        pen += (long double)w->pen[k] * g[k] * w->pen[k] * g[k];
    return sum - pen / 2;
}

/* Fills A with the sqrt(w)-scaled rows at the current eta (plus the
 * penalty rows when with_pen) and b with the step's right-hand side, and
 * factors A. Returns 0, or -1 when GSL fails. */
static int irls_factor(irls *w, int with_pen)
{
    for (size_t i = 0; i < w->n; i++) {
        long double e = w->eta[i];
        /* p and 1 - p each from its own exponential: no cancellation */
        long double pi = 1 / (1 + expl(-e)), qi = 1 / (1 + expl(e));
        long double wt = pi * qi;
        if (wt < W_MIN)
            wt = W_MIN;
        long double sw = sqrtl(wt);
        const long double *row = w->X + i * w->p;
        for (size_t k = 0; k < w->r; k++)
            gsl_matrix_set(w->A, i, k, (double)(sw * row[w->col[k]] * w->c[k]));
        long double resid = w->y[i] > 0.5 ? qi : -pi;  /* y - p */
        gsl_vector_set(w->b, i, (double)(resid / sw));
    }
    for (size_t a = w->n; a < w->rows; a++) {
        size_t k = a - w->n;
        for (size_t j = 0; j < w->r; j++)
            gsl_matrix_set(w->A, a, j, j == k && with_pen ? w->pen[k] : 0.0);
        gsl_vector_set(w->b, a, with_pen ? -w->pen[k] * w->g[k] : 0.0);
    }
    int signum;
    return gsl_linalg_QRPT_decomp(w->A, w->tau, w->perm, &signum, w->norm)
               ? -1 : 0;
}

/* The least squares step from the factored A into w->d. A component whose
 * pivot is negligible (weights underflowing under separation) is left 0. */
static void irls_step(irls *w)
{
    gsl_linalg_QR_QTvec(w->A, w->tau, w->b);
    double r11 = fabs(gsl_matrix_get(w->A, 0, 0));
    double *x = w->gnew;  /* scratch, pivoted order */
    for (size_t kk = w->r; kk-- > 0;) {
        double rkk = gsl_matrix_get(w->A, kk, kk);
        if (!(fabs(rkk) > LINEAR_RANK_TOL * r11)) {
            x[kk] = 0;
            continue;
        }
        long double s = gsl_vector_get(w->b, kk);
        for (size_t j = kk + 1; j < w->r; j++)
            s -= (long double)gsl_matrix_get(w->A, kk, j) * x[j];
        x[kk] = (double)(s / rkk);
    }
    for (size_t k = 0; k < w->r; k++)
        w->d[gsl_permutation_get(w->perm, k)] = x[k];
}

/* (X'WX)^-1 = R^-1 R^-T from the factored A (no penalty rows), in kept
 * column order, into cov (r x r). */
static int irls_covariance(const irls *w, double *cov)
{
    size_t r = w->r;
    double *piv = malloc((r ? r * r : 1) * sizeof *piv);
    if (piv == NULL)
        return -2;   /* no memory, told apart from a singular R */
    if (linear_cov_from_r(w->A, r, piv)) {
        free(piv);
        return -1;
    }
    for (size_t a = 0; a < r; a++)
        for (size_t b = 0; b < r; b++)
            cov[gsl_permutation_get(w->perm, a) * r
                + gsl_permutation_get(w->perm, b)] = piv[a * r + b];
    free(piv);
    return 0;
}

/* What the model keeps of the fit for logistic_leverage, in m->priv. */
typedef struct factor {
    size_t r;
    int valid;       /* 0: no factor (separation without a penalty) */
    size_t *col;     /* r: design column of kept column k (as irls->col) */
    double *c;       /* r: its power-of-two scale */
    double *pen;     /* r: its penalty row entry, 0 without ridge */
    double *R;       /* r x r upper triangle, pivoted, of the scaled
                        weighted rows (and penalty rows) */
    size_t *pcol;    /* r: design column of pivoted column a */
    double *pscale;  /* r: its scale */
} factor;

static void factor_free(factor *f)
{
    if (f == NULL)
        return;
    free(f->col);
    free(f->c);
    free(f->pen);
    free(f->R);
    free(f->pcol);
    free(f->pscale);
    free(f);
}

static factor *factor_alloc(size_t r)
{
    factor *f = calloc(1, sizeof *f);
    if (f == NULL)
        return NULL;
    f->r = r;
    f->col = malloc(r * sizeof *f->col);
    f->c = malloc(r * sizeof *f->c);
    f->pen = malloc(r * sizeof *f->pen);
    f->R = malloc(r * r * sizeof *f->R);
    f->pcol = malloc(r * sizeof *f->pcol);
    f->pscale = malloc(r * sizeof *f->pscale);
    if (!f->col || !f->c || !f->pen || !f->R || !f->pcol || !f->pscale) {
        factor_free(f);
        return NULL;
    }
    return f;
}

/* Copies R and its column order from w's factored A into f. */
static void factor_keep(factor *f, const irls *w)
{
    size_t r = w->r;
    for (size_t a = 0; a < r; a++) {
        size_t k = gsl_permutation_get(w->perm, a);
        f->pcol[a] = w->col[k];
        f->pscale[a] = w->c[k];
        for (size_t b = 0; b < r; b++)
            f->R[a * r + b] = b >= a ? gsl_matrix_get(w->A, a, b) : 0.0;
    }
    f->valid = 1;
}

void logistic_free(logistic_model *m)
{
    if (m == NULL)
        return;
    factor_free(m->priv);
    free(m->beta);
    free(m->se);
    free(m->z);
    free(m->pvalue);
    free(m->low);
    free(m->high);
    free(m->odds);
    free(m->odds_low);
    free(m->odds_high);
    free(m->drop);
    free(m->with);
    free(m->n_with);
    free(m->prob);
    free(m);
}

static logistic_model *model_alloc(size_t n, size_t p)
{
    logistic_model *m = calloc(1, sizeof *m);
    if (m == NULL)
        return NULL;
    double **per[] = {&m->beta, &m->se, &m->z, &m->pvalue, &m->low, &m->high,
                      &m->odds, &m->odds_low, &m->odds_high};
    int bad = 0;
    for (size_t a = 0; a < sizeof per / sizeof per[0]; a++) {
        *per[a] = malloc(p * sizeof **per[a]);
        if (*per[a] == NULL)
            bad = 1;
        else
            for (size_t j = 0; j < p; j++)
                (*per[a])[j] = NAN;
    }
    m->drop = calloc(p, sizeof *m->drop);
    m->with = calloc(p * LINEAR_WITH_MAX, sizeof *m->with);
    m->n_with = calloc(p, sizeof *m->n_with);
    m->prob = malloc(n * sizeof *m->prob);
    if (bad || !m->drop || !m->with || !m->n_with || !m->prob) {
        logistic_free(m);
        return NULL;
    }
    m->separating_term = -1;
    return m;
}

/* The scale of column j: with an intercept its standard deviation over the
 * rows (divisor n), without one its root mean square; the absolute value
 * when the column is constant. */
static double column_spread(const long double *X, size_t n, size_t p, size_t j,
                            int intercept)
{
    long double s = 0, ss = 0;
    for (size_t i = 0; i < n; i++)
        s += X[i * p + j];
    /* without an intercept the inputs cannot be centred (that would change
     * the model), so their scale is the root mean square, as in
     * gradient.c */
    long double mean = intercept ? s / n : 0;
    for (size_t i = 0; i < n; i++)
        ss += (X[i * p + j] - mean) * (X[i * p + j] - mean);
    if (ss > 0)
        return (double)sqrtl(ss / n);
    return (double)fabsl(s / n);
}

/* The fitted probabilities and the likelihood measures of the linear
 * predictors eta (n values). */
static void eta_measures(logistic_model *m, const double *y,
                         const long double *eta)
{
    size_t n = m->n, ones = 0;
    long double ll = 0;
    for (size_t i = 0; i < n; i++) {
        ll += row_loglik(y[i], eta[i]);
        m->prob[i] = (double)(1 / (1 + expl(-eta[i])));
        ones += y[i] == 1;
    }
    double p1 = (double)ones / (double)n;
    m->loglik = (double)ll;
    m->null_loglik = m->intercept ? ones * log(p1) + (n - ones) * log1p(-p1)
                                  : n * log(0.5);
    m->deviance = -2 * m->loglik;
    m->null_deviance = -2 * m->null_loglik;
    m->aic = m->deviance + 2.0 * m->rank;
    m->bic = m->deviance + (double)m->rank * log((double)n);
    m->mcfadden = 1 - m->loglik / m->null_loglik;
}

/* Runs the iterations from g = 0. Sets m->iterations, m->converged and
 * m->separation; returns -1 when GSL fails. */
static int irls_run(irls *w, logistic_model *m)
{
    long double ll, pl = irls_eval(w, w->g, &ll);
    double dev = (double)(-2 * ll);
    int stall = 0;
    m->converged = 0;
    for (int it = 1; it <= LOGISTIC_ITER_MAX; it++) {
        m->iterations = it;
        if (irls_factor(w, 1))
            return -1;
        irls_step(w);
        long double llnew = 0, plnew = 0;
        double t = 1;
        int improved = 0;
        for (int h = 0; h <= LOGISTIC_HALVINGS_MAX; h++, t /= 2) {
            for (size_t k = 0; k < w->r; k++)
                w->gnew[k] = w->g[k] + t * w->d[k];
            plnew = irls_eval(w, w->gnew, &llnew);
            /* a step that loses no more than rounding counts as no loss */
            if (plnew >= pl - 1e-15L * (fabsl(pl) + 1)) {
                improved = 1;
                break;
            }
        }
        if (!improved) {
            irls_eval(w, w->g, &ll);  /* back to the last good point */
            break;
        }
        double step = 0;
        for (size_t k = 0; k < w->r; k++) {
            step = fmax(step, fabs(w->gnew[k] - w->g[k]) / fmax(1, fabs(w->gnew[k])));
            w->g[k] = w->gnew[k];
        }
        double devnew = (double)(-2 * llnew);
        int dev_still = fabs(dev - devnew) / (fabs(devnew) + 0.1) < DEV_TOL;
        dev = devnew;
        pl = plnew;
        ll = llnew;
        if (dev_still && step < STEP_TOL) {
            m->converged = 1;
            break;
        }
        /* a still deviance with moving coefficients and exactly fitted
         * rows is separation: waiting longer only inflates them */
        size_t exact = 0;
        for (size_t i = 0; dev_still && i < w->n; i++) {
            long double pi = 1 / (1 + expl(-w->eta[i]));
            exact += fabsl(w->y[i] - pi) < SEP_EXACT;
        }
        stall = exact > 0 ? stall + 1 : 0;
        if (stall >= SEP_STALL)
            break;
    }
    m->separation = SEPARATION_NONE;
    if (!m->converged) {
        size_t exact = 0;
        for (size_t i = 0; i < w->n; i++) {
            long double pi = 1 / (1 + expl(-w->eta[i]));
            exact += fabsl(w->y[i] - pi) < SEP_EXACT;
        }
        if (exact == w->n)
            m->separation = SEPARATION_COMPLETE;
        else if (exact > 0)
            m->separation = SEPARATION_QUASI;
    }
    return 0;
}

rf_status logistic_fit(const long double *X, const double *y, size_t n,
                       size_t p, int intercept, double level, double ridge,
                       logistic_model **out, rf_error *err)
{
    *out = NULL;
    if (linear_terms_check(p, err))
        return err->status;
    if (n < p + 1)
        return error_set(err, RF_EINPUT, NULL,
                         "only %zu usable rows for %zu terms: a logistic fit "
                         "needs at least one row more than it has terms",
                         n, p);
    if (!(ridge >= 0) || !isfinite(ridge))
        return error_set(err, RF_EINPUT, NULL,
                         "ridge must be a number 0 or more");
    size_t ones = 0;
    for (size_t i = 0; i < n; i++) {
        if (y[i] != 0 && y[i] != 1)
            return error_set(err, RF_EINPUT, NULL,
                             "fitted row %zu has a target other than 0 or 1",
                             i + 1);
        ones += y[i] == 1;
        for (size_t j = 0; j < p; j++)
            if (!isfinite((double)X[i * p + j]))
                return error_set(err, RF_EINPUT, NULL,
                                 "fitted row %zu has a non-finite input", i + 1);
    }
    if (ones == 0 || ones == n)
        return error_set(err, RF_EINPUT, NULL,
                         "the target has one value only (all %zu fitted rows "
                         "are %s): there is nothing to tell apart",
                         n, ones ? "the positive class" : "the other class");

    rf_status st = RF_ENOMEM;
    irls *w = NULL;
    factor *fac = NULL;
    double *cov = NULL;
    long double *yl = NULL;
    linear_model *lm = NULL;
    logistic_model *m = model_alloc(n, p);
    if (m == NULL)
        goto fail;
    m->n = n;
    m->p = p;
    m->intercept = intercept;
    m->level = level;
    m->ridge = ridge;

    /* 1. the rank decision of the linear model (its target is irrelevant
     * to it; y is passed only because linear_fit needs one) */
    yl = malloc(n * sizeof *yl);
    if (yl == NULL)
        goto fail;
    for (size_t i = 0; i < n; i++)
        yl[i] = y[i];
    st = linear_fit(X, yl, n, p, intercept, level, &lm, err);
    if (st != RF_OK)
        goto fail;
    st = RF_ENOMEM;
    memcpy(m->drop, lm->drop, p * sizeof *m->drop);
    memcpy(m->with, lm->with, p * LINEAR_WITH_MAX * sizeof *m->with);
    memcpy(m->n_with, lm->n_with, p * sizeof *m->n_with);
    size_t r = lm->rank;
    m->rank = r;

    w = irls_alloc(n, p, r, ridge > 0);
    cov = malloc(r * r * sizeof *cov);
    m->priv = factor_alloc(r);
    if (w == NULL || cov == NULL || m->priv == NULL)
        goto fail;
    w->X = X;
    w->y = y;
    double *spread = w->d;  /* scratch until the iterations */
    for (size_t j = 0, k = 0; j < p; j++) {
        if (m->drop[j] != LINEAR_KEPT)
            continue;
        w->col[k] = j;
        w->c[k] = lm->scale[j];
        spread[k] = column_spread(X, n, p, j, intercept);
        /* the penalty row of the scaled coefficient g_k = b_j / c_k:
         * sqrt(ridge) s_j b_j = sqrt(ridge) s_j c_k g_k */
        if (ridge > 0 && !(intercept && j == 0))
            w->pen[k] = sqrt(ridge) * spread[k] * w->c[k];
        k++;
    }

    fac = m->priv;
    memcpy(fac->col, w->col, r * sizeof *fac->col);
    memcpy(fac->c, w->c, r * sizeof *fac->c);
    memcpy(fac->pen, w->pen, r * sizeof *fac->pen);

    /* 2-6. the iterations */
    if (irls_run(w, m)) {
        st = error_set(err, RF_ESYSTEM, NULL, "QR factorization failed");
        goto fail;
    }

    /* the term most responsible for a separation */
    if (m->separation != SEPARATION_NONE) {
        double best = -1;
        for (size_t k = 0; k < r; k++) {
            size_t j = w->col[k];
            if (intercept && j == 0)
                continue;
            double v = fabs(w->g[k] * w->c[k])
                       * column_spread(X, n, p, j, intercept);
            if (v > best) {
                best = v;
                m->separating_term = (long)j;
            }
        }
        if (m->separating_term < 0 && r > 0)
            m->separating_term = (long)w->col[0];
    }

    /* measures at the last iterate */
    eta_measures(m, y, w->eta);

    if (m->separation != SEPARATION_NONE && ridge == 0) {
        st = RF_OK;  /* per-term results stay NaN */
        goto done;
    }
    for (size_t k = 0; k < r; k++) {
        size_t j = w->col[k];
        m->beta[j] = w->g[k] * w->c[k];
        m->odds[j] = exp(m->beta[j]);
    }
    if (ridge == 0) {
        double zc = gsl_cdf_ugaussian_Qinv((1 - level) / 2);
        int cs = irls_factor(w, 0) ? -1 : irls_covariance(w, cov);
        if (cs == -2) {
            st = error_nomem(err, NULL);
            goto fail;
        }
        if (cs != 0) {
            st = error_set(err, RF_ESYSTEM, NULL, "QR factorization failed");
            goto fail;
        }
        for (size_t k = 0; k < r; k++) {
            size_t j = w->col[k];
            m->se[j] = sqrt(cov[k * r + k]) * w->c[k];
            m->z[j] = m->beta[j] / m->se[j];
            m->pvalue[j] = 2 * gsl_cdf_ugaussian_Q(fabs(m->z[j]));
            m->low[j] = m->beta[j] - zc * m->se[j];
            m->high[j] = m->beta[j] + zc * m->se[j];
            m->odds_low[j] = exp(m->low[j]);
            m->odds_high[j] = exp(m->high[j]);
        }
        factor_keep(fac, w);  /* A holds the weighted rows at the fit */
    } else {
        /* 8. with the penalty rows: R'R = X'WX + P at the fit */
        if (irls_factor(w, 1)) {
            st = error_set(err, RF_ESYSTEM, NULL, "QR factorization failed");
            goto fail;
        }
        factor_keep(fac, w);
    }
    st = RF_OK;
done:
    *out = m;
    m = NULL;
fail:
    if (st == RF_ENOMEM)
        error_nomem(err, NULL);
    irls_free(w);
    free(cov);
    free(yl);
    linear_free(lm);
    logistic_free(m);
    return st;
}

double logistic_predict(const logistic_model *m, const long double *x)
{
    long double e = 0;
    for (size_t j = 0; j < m->p; j++)
        if (m->drop[j] == LINEAR_KEPT)
            e += m->beta[j] * x[j];
    return (double)(1 / (1 + expl(-e)));
}

rf_status logistic_set_beta(logistic_model *m, const long double *X,
                            const double *y, const double *beta,
                            rf_error *err)
{
    /* allocated first, so a failure leaves the model as it was */
    irls *w = irls_alloc(m->n, m->p, m->rank, m->ridge > 0);
    if (w == NULL)
        return error_nomem(err, NULL);
    long double *eta = w->eta;
    int finite = 1;
    for (size_t j = 0; j < m->p; j++) {
        m->beta[j] = m->drop[j] == LINEAR_KEPT ? beta[j] : NAN;
        m->odds[j] = exp(m->beta[j]);
        m->se[j] = m->z[j] = m->pvalue[j] = m->low[j] = m->high[j] = NAN;
        m->odds_low[j] = m->odds_high[j] = NAN;
        if (m->drop[j] == LINEAR_KEPT && !isfinite(beta[j]))
            finite = 0;
    }
    for (size_t i = 0; i < m->n; i++) {
        long double e = 0;
        for (size_t j = 0; j < m->p; j++)
            if (m->drop[j] == LINEAR_KEPT)
                e += X[i * m->p + j] * m->beta[j];
        eta[i] = e;
    }
    eta_measures(m, y, eta);

    /* the factor at the new probabilities, for logistic_leverage */
    rf_status st = RF_OK;
    factor *f = m->priv;
    if (f != NULL) {
        f->valid = 0;
        if (finite) {
            w->X = X;
            w->y = y;
            memcpy(w->col, f->col, w->r * sizeof *w->col);
            memcpy(w->c, f->c, w->r * sizeof *w->c);
            memcpy(w->pen, f->pen, w->r * sizeof *w->pen);
            if (irls_factor(w, m->ridge > 0))
                st = error_set(err, RF_ESYSTEM, NULL,
                               "QR factorization failed");
            else
                factor_keep(f, w);
        }
    }
    irls_free(w);
    return st;
}

double logistic_leverage(const logistic_model *m, const long double *x)
{
    const factor *f = m->priv;
    if (f == NULL || !f->valid)
        return NAN;
    long double e = 0;
    for (size_t j = 0; j < m->p; j++)
        if (m->drop[j] == LINEAR_KEPT)
            e += m->beta[j] * x[j];
    /* the row's weight as irls_factor forms it */
    long double pi = 1 / (1 + expl(-e)), qi = 1 / (1 + expl(e));
    long double wt = pi * qi;
    if (wt < W_MIN)
        wt = W_MIN;
    long double sw = sqrtl(wt);
    /* h = || R^-T (w^1/2 S x)_pivoted ||^2 by forward substitution, as
     * linear_leverage; rank <= LINEAR_RANK_MAX, so no allocation */
    size_t r = f->r;
    double v[LINEAR_RANK_MAX];
    long double h = 0;
    for (size_t k = 0; k < r; k++) {
        long double s = sw * x[f->pcol[k]] * f->pscale[k];
        for (size_t a = 0; a < k; a++)
            s -= (long double)f->R[a * r + k] * v[a];
        v[k] = (double)(s / f->R[k * r + k]);
        h += (long double)v[k] * v[k];
    }
    return (double)h;
}
