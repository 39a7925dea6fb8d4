/*
 * gradient.c: batch gradient descent for linear and logistic models on
 * standardized inputs (see gradient.h for the cost, the step and the
 * stopping rule). The matrix-vector products go through CBLAS (OpenBLAS at
 * link time). Not an exact solver: no rank decision beyond zero and
 * constant columns, no standard errors.
 */
#include "gradient.h"

#include <float.h>
#include <math.h>
#include <stdint.h>
#include <stdlib.h>

#include <gsl/gsl_cblas.h>

/* Epochs between fresh evaluations of the cost (see the descent loop). */
#define COST_REFRESH 256

void gradient_free(gradient_model *m)
{
    if (m == NULL)
        return;
    free(m->beta);
    free(m->drop);
    free(m->center);
    free(m->scale);
    free(m->gamma);
    free(m);
}

static gradient_model *model_alloc(size_t p)
{
    gradient_model *m = calloc(1, sizeof *m);
    if (m == NULL)
        return NULL;
    m->beta = malloc(p * sizeof *m->beta);
    m->drop = malloc(p * sizeof *m->drop);
    m->center = malloc(p * sizeof *m->center);
    m->scale = malloc(p * sizeof *m->scale);
    m->gamma = malloc(p * sizeof *m->gamma);
    if (m->beta == NULL || m->drop == NULL || m->center == NULL
        || m->scale == NULL || m->gamma == NULL) {
        gradient_free(m);
        return NULL;
    }
    return m;
}

const char *gradient_stop_str(gradient_stop s)
{
    switch (s) {
    case GRADIENT_CONVERGED:
        return "converged: the cost stopped falling";
    case GRADIENT_EPOCHS:
        return "not converged: the epoch cap was reached";
    case GRADIENT_DIVERGED:
        return "not converged: the cost rose (the rate is too large)";
    case GRADIENT_NOTHING:
        return "not fitted: every term was dropped";
    }
    return "unknown";
}

/* log(1 + e^t) without overflow or loss for large |t|. */
static double softplus(double t)
{
    return t > 0 ? t + log1p(exp(-t)) : log1p(exp(t));
}

static double sigmoid(double t)
{
    if (t >= 0)
        return 1 / (1 + exp(-t));
    double e = exp(t);
    return e / (1 + e);
}

/* Mean loss at the linear predictors eta (n), without the penalty. */
static double mean_loss(const double *eta, const double *y, size_t n,
                        int logistic)
{
    long double s = 0;
    for (size_t i = 0; i < n; i++) {
        if (logistic) {
            s += softplus(eta[i]) - y[i] * eta[i];
        } else {
            double r = y[i] - eta[i];
            s += 0.5 * r * r;
        }
    }
    return (double)(s / n);
}

/* Largest eigenvalue of Z'Z/n by power iteration, Z n x q (row-major).
 * w (n) and v, t (q) are workspace. */
static double largest_eigenvalue(const double *Z, size_t n, size_t q,
                                 double *w, double *v, double *t)
{
    /* A start with no symmetry, so it is not orthogonal to the top
     * eigenvector of a structured design (common practice). */
    for (size_t j = 0; j < q; j++)
        v[j] = 1 + 0.6180339887 * (double)((j * 7 + 3) % 11);
    double nv = cblas_dnrm2((int)q, v, 1);
    cblas_dscal((int)q, 1 / nv, v, 1);
    double lambda = 0;
    for (int k = 0; k < GRADIENT_POWER_ITERS; k++) {
        cblas_dgemv(CblasRowMajor, CblasNoTrans, (int)n, (int)q, 1.0, Z,
                    (int)q, v, 1, 0.0, w, 1);
        cblas_dgemv(CblasRowMajor, CblasTrans, (int)n, (int)q, 1.0 / (double)n,
                    Z, (int)q, w, 1, 0.0, t, 1);
        lambda = cblas_ddot((int)q, v, 1, t, 1);  /* Rayleigh quotient */
        double nt = cblas_dnrm2((int)q, t, 1);
        if (!(nt > 0))
            break;
        for (size_t j = 0; j < q; j++)
            v[j] = t[j] / nt;
    }
    return lambda;
}

rf_status gradient_fit(const long double *X, const double *y, size_t n,
                       size_t p, int intercept, int logistic, double ridge,
                       double rate, long epochs, gradient_model **out,
                       rf_error *err)
{
    *out = NULL;
    if (p == 0)
        return error_set(err, RF_EINPUT, NULL, "the model has no terms");
    if (n == 0)
        return error_set(err, RF_EINPUT, NULL, "there are no rows to fit");
    if (n > INT32_MAX || p > INT32_MAX / 4 || n > SIZE_MAX / sizeof(double) / p)
        return error_set(err, RF_EINPUT, NULL,
                         "%zu rows by %zu terms is too large for the "
                         "gradient solver", n, p);
    if (!isfinite(rate) || rate < 0)
        return error_set(err, RF_EINPUT, NULL,
                         "the rate must be a positive number (or 0 for the "
                         "default), not %g", rate);
    if (!isfinite(ridge) || ridge < 0)
        return error_set(err, RF_EINPUT, NULL,
                         "the ridge penalty must be 0 or more, not %g", ridge);
    if (epochs < 0)
        return error_set(err, RF_EINPUT, NULL,
                         "epochs must be 0 (the default) or more, not %ld",
                         epochs);
    for (size_t i = 0; i < n; i++) {
        if (!isfinite(y[i]))
            return error_set(err, RF_EINPUT, NULL,
                             "fitted row %zu has a non-finite target", i + 1);
        if (logistic && y[i] != 0 && y[i] != 1)
            return error_set(err, RF_EINPUT, NULL,
                             "fitted row %zu has the target %g; a logistic "
                             "model needs 0 or 1", i + 1, y[i]);
        for (size_t j = 0; j < p; j++)
            if (!isfinite((double)X[i * p + j]))
                return error_set(err, RF_EINPUT, NULL,
                                 "fitted row %zu has a non-finite input",
                                 i + 1);
        if (intercept && X[i * p] != 1)
            return error_set(err, RF_EINPUT, NULL,
                             "fitted row %zu: the intercept column is not 1",
                             i + 1);
    }

    rf_status st = RF_ENOMEM;
    double *Z = NULL, *eta = NULL, *r = NULL, *u = NULL, *pr = NULL;
    double *g = NULL, *d = NULL, *gam = NULL;
    size_t *col = NULL;
    gradient_model *m = model_alloc(p);
    if (m == NULL)
        goto fail;
    m->n = n;
    m->p = p;
    m->intercept = intercept;
    m->logistic = logistic;
    m->ridge = ridge;
    m->epochs = epochs > 0 ? epochs : GRADIENT_EPOCHS_DEFAULT;

    /* 1. standardization: two passes in long double per column */
    size_t q = 0;
    for (size_t j = 0; j < p; j++) {
        m->drop[j] = LINEAR_KEPT;
        m->beta[j] = NAN;
        m->gamma[j] = NAN;
        if (intercept && j == 0) {
            m->center[j] = 0;
            m->scale[j] = 1;
            q++;
            continue;
        }
        long double sum = 0, ss = 0, lo = X[j], hi = X[j];
        for (size_t i = 0; i < n; i++) {
            long double v = X[i * p + j];
            sum += v;
            lo = fminl(lo, v);
            hi = fmaxl(hi, v);
        }
        long double mean = sum / n;
        if (intercept) {
            for (size_t i = 0; i < n; i++) {
                long double dv = X[i * p + j] - mean;
                ss += dv * dv;
            }
        } else {
            for (size_t i = 0; i < n; i++)
                ss += X[i * p + j] * X[i * p + j];
        }
        if (lo == 0 && hi == 0) {
            m->drop[j] = LINEAR_DROP_ZERO;
        } else if (intercept && lo == hi) {
            m->drop[j] = LINEAR_DROP_CONSTANT;
        } else {
            m->center[j] = intercept ? (double)mean : 0;
            m->scale[j] = (double)sqrtl(ss / n);
            q++;
            continue;
        }
        m->center[j] = 0;
        m->scale[j] = NAN;
    }
    if (q == 0) {
        m->stop = GRADIENT_NOTHING;
        m->cost = NAN;
        m->last_drop = NAN;
        m->lipschitz = NAN;
        m->rate = rate;
        *out = m;
        return RF_OK;
    }

    col = malloc(q * sizeof *col);
    Z = malloc(n * q * sizeof *Z);
    eta = malloc(n * sizeof *eta);
    r = malloc(n * sizeof *r);
    u = malloc(n * sizeof *u);
    pr = malloc(n * sizeof *pr);
    g = malloc(q * sizeof *g);
    d = malloc(q * sizeof *d);
    gam = malloc(q * sizeof *gam);
    if (col == NULL || Z == NULL || eta == NULL || r == NULL || u == NULL
        || pr == NULL || g == NULL || d == NULL || gam == NULL)
        goto fail;
    for (size_t j = 0, k = 0; j < p; j++)
        if (m->drop[j] == LINEAR_KEPT)
            col[k++] = j;
    for (size_t i = 0; i < n; i++)
        for (size_t k = 0; k < q; k++) {
            size_t j = col[k];
            Z[i * q + k] = (double)((X[i * p + j] - (long double)m->center[j])
                                    / m->scale[j]);
        }
    /* the penalty skips the intercept, which is Z's column 0 when present;
     * per row, it is ridge / n (gradient.h) */
    size_t pen0 = intercept ? 1 : 0;
    double lam = ridge / (double)n;

    /* 2. the step */
    m->lipschitz = largest_eigenvalue(Z, n, q, eta, d, g);
    if (rate == 0)
        rate = 1 / ((logistic ? m->lipschitz / 4 : m->lipschitz) + lam);
    m->rate = rate;

    /* 3. start: the intercept-only optimum when the columns are centred */
    for (size_t k = 0; k < q; k++)
        gam[k] = 0;
    if (intercept) {
        long double ys = 0;
        for (size_t i = 0; i < n; i++)
            ys += y[i];
        double ybar = (double)(ys / n);
        if (!logistic)
            gam[0] = ybar;
        else if (ybar > 0 && ybar < 1)
            gam[0] = log(ybar / (1 - ybar));
    }

    /* 4. descent (Boyd & Vandenberghe, Convex Optimization, sec. 9.3) */
    m->stop = GRADIENT_EPOCHS;
    m->last_drop = NAN;
    double cost = 0;
    for (long e = 0; e < m->epochs; e++) {
        cblas_dgemv(CblasRowMajor, CblasNoTrans, (int)n, (int)q, 1.0, Z,
                    (int)q, gam, 1, 0.0, eta, 1);
        /* The cost only scales the stopping test, so it is carried forward
         * by the computed changes and taken afresh now and then (the
         * transcendental functions of the log loss dominate an epoch). */
        if (e % COST_REFRESH == 0) {
            double pen = 0;
            for (size_t k = pen0; k < q; k++)
                pen += gam[k] * gam[k];
            cost = mean_loss(eta, y, n, logistic) + 0.5 * lam * pen;
        }
        for (size_t i = 0; i < n; i++) {
            if (logistic)
                pr[i] = sigmoid(eta[i]);
            r[i] = (logistic ? pr[i] : eta[i]) - y[i];
        }
        cblas_dgemv(CblasRowMajor, CblasTrans, (int)n, (int)q, 1.0 / (double)n,
                    Z, (int)q, r, 1, 0.0, g, 1);
        for (size_t k = pen0; k < q; k++)
            g[k] += lam * gam[k];
        for (size_t k = 0; k < q; k++)
            d[k] = -rate * g[k];
        cblas_dgemv(CblasRowMajor, CblasNoTrans, (int)n, (int)q, 1.0, Z,
                    (int)q, d, 1, 0.0, u, 1);

        /* The change of the cost, row by row from u = Z d, so no two large
         * costs are subtracted: linear, (r+u)^2/2 - r^2/2 = u (r + u/2);
         * logistic, softplus(eta+u) - softplus(eta) = log1p(s(eta) expm1(u)),
         * exact algebra since (1 + e^(a+u)) / (1 + e^a) = 1 + s(a)(e^u - 1). */
        long double dsum = 0, dabs = 0;
        for (size_t i = 0; i < n; i++) {
            if (logistic) {
                double a = log1p(pr[i] * expm1(u[i]));
                dsum += a - y[i] * u[i];
                dabs += fabs(a) + fabs(y[i] * u[i]);
            } else {
                dsum += u[i] * (r[i] + 0.5 * u[i]);
                dabs += fabs(u[i]) * (fabs(eta[i]) + fabs(y[i])
                                      + 0.5 * fabs(u[i]));
            }
        }
        double dpen = 0, dpabs = 0;
        for (size_t k = pen0; k < q; k++) {
            dpen += d[k] * (2 * gam[k] + d[k]);
            dpabs += fabs(d[k]) * (2 * fabs(gam[k]) + fabs(d[k]));
        }
        double change = (double)(dsum / n) + 0.5 * lam * dpen;
        /* A bound on the rounding error of change (a few units in the last
         * place of its terms, common practice; a linear residual eta - y
         * is only known to the last place of eta and y): a change below it
         * is no change, which is how an exact fit (cost near 0) ends. */
        double noise = 16 * DBL_EPSILON
                       * ((double)(dabs / n) + 0.5 * lam * dpabs);

        for (size_t k = 0; k < q; k++)
            gam[k] += d[k];
        m->iterations = e + 1;
        cost += change;
        m->cost = cost;
        m->last_drop = -change / m->cost;
        if (!isfinite(change) || !isfinite(m->cost)) {
            m->stop = GRADIENT_DIVERGED;
            break;
        }
        if (change > noise) {
            m->stop = GRADIENT_DIVERGED;
            break;
        }
        if (-change <= fmax(GRADIENT_TOL * fabs(m->cost), noise)) {
            m->stop = GRADIENT_CONVERGED;
            break;
        }
    }
    m->converged = m->stop == GRADIENT_CONVERGED;

    /* the final cost afresh, then back to the original scale */
    cblas_dgemv(CblasRowMajor, CblasNoTrans, (int)n, (int)q, 1.0, Z, (int)q,
                gam, 1, 0.0, eta, 1);
    {
        double pen = 0;
        for (size_t k = pen0; k < q; k++)
            pen += gam[k] * gam[k];
        m->cost = mean_loss(eta, y, n, logistic) + 0.5 * lam * pen;
    }
    long double b0 = intercept ? gam[0] : 0;
    for (size_t k = pen0; k < q; k++) {
        size_t j = col[k];
        long double b = (long double)gam[k] / m->scale[j];
        m->gamma[j] = gam[k];
        m->beta[j] = (double)b;
        b0 -= b * m->center[j];
    }
    if (intercept) {
        m->gamma[0] = gam[0];
        m->beta[0] = (double)b0;
    }
    st = RF_OK;
    *out = m;
    m = NULL;
fail:
    if (st == RF_ENOMEM)
        error_nomem(err, "gradient solver");
    free(col);
    free(Z);
    free(eta);
    free(r);
    free(u);
    free(pr);
    free(g);
    free(d);
    free(gam);
    gradient_free(m);
    return st;
}

double gradient_predict(const gradient_model *m, const long double *x)
{
    /* on the standardized scale: the intercept then carries no cancellation
     * between large centred terms */
    long double eta = 0;
    for (size_t j = 0; j < m->p; j++) {
        if (m->drop[j] != LINEAR_KEPT || isnan(m->gamma[j]))
            continue;
        if (m->intercept && j == 0)
            eta += m->gamma[0];
        else
            eta += m->gamma[j] * ((x[j] - (long double)m->center[j])
                                  / m->scale[j]);
    }
    return m->logistic ? sigmoid((double)eta) : (double)eta;
}
