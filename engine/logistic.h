/*
 * logistic.h: logistic regression for yes/no targets, fitted by Newton's
 * method as iteratively reweighted least squares (each step a weighted QR
 * solve, never the normal equations), with step halving, an optional L2
 * (ridge) penalty that never touches the intercept, rank decisions as in
 * linear.h, and detection of complete and quasi-complete separation. Knows
 * matrices, not tables or workbooks.
 */
#ifndef ROWFIT_LOGISTIC_H
#define ROWFIT_LOGISTIC_H

#include <stddef.h>

#include "../io/error.h"
#include "linear.h"   /* linear_drop, LINEAR_RANK_TOL */

#define LOGISTIC_ITER_MAX 100      /* Newton steps before giving up */
#define LOGISTIC_HALVINGS_MAX 30   /* step halvings within one step */

typedef enum logistic_separation {
    SEPARATION_NONE = 0,
    SEPARATION_QUASI,     /* some rows are fitted exactly (p = 0 or 1) */
    SEPARATION_COMPLETE   /* every row is fitted exactly */
} logistic_separation;

typedef struct logistic_model {
    size_t n, p, rank;
    int intercept;
    double level, ridge;

    /* per term (p); NaN where dropped or undefined (with ridge > 0 the
     * classical standard errors do not apply: se, z, p value and the
     * intervals are NaN) */
    double *beta, *se, *z, *pvalue, *low, *high;
    double *odds, *odds_low, *odds_high;
    linear_drop *drop;
    size_t *with, *n_with;     /* as in linear_model */

    double loglik, null_loglik, deviance, null_deviance, aic, bic;
    double mcfadden;           /* 1 - loglik / null_loglik */
    int iterations, converged;
    logistic_separation separation;
    long separating_term;      /* the term most responsible, or -1 */

    double *prob;              /* n fitted probabilities */

    void *priv;                /* private to logistic.c: the R factor at
                                  the fit, for logistic_leverage */
} logistic_model;

/* Fits y (n values, each 0 or 1) on X (n x p, row-major; column 0 all ones
 * when intercept). ridge >= 0 is the L2 penalty on the standardized scale
 * (see docs/methods.md). Errors: RF_EINPUT for too few rows, a target with
 * one class only, non-finite values; non-convergence and separation are
 * results (converged = 0, separation), not errors. */
rf_status logistic_fit(const long double *X, const double *y, size_t n,
                       size_t p, int intercept, double level, double ridge,
                       logistic_model **out, rf_error *err);
void logistic_free(logistic_model *m);  /* accepts NULL */

/* Replaces the coefficients with beta (p values from another solver of the
 * same problem, such as gradient descent; dropped terms ignored) and
 * recomputes the probabilities and likelihood measures, and the factor of
 * logistic_leverage at the new probabilities. Standard errors, z, p values
 * and every interval become NaN: they belong to the exact fit. X and y as
 * given to logistic_fit. Errors: RF_ENOMEM (the model is left as it was),
 * RF_ESYSTEM (QR failed; logistic_leverage then gives NaN). */
rf_status logistic_set_beta(logistic_model *m, const long double *X,
                            const double *y, const double *beta,
                            rf_error *err);

/* The probability of the positive class for a row x (p values). */
double logistic_predict(const logistic_model *m, const long double *x);

/* The leverage of a row x (p values, same columns as X) at the fit:
 * h = w x'(X'WX + P)^-1 x, w = p(1-p) the row's IRLS weight at the fitted
 * probability, W the weights of the fitted rows, P the ridge penalty (0
 * without ridge). For a fitted row, the diagonal of the hat matrix of the
 * last IRLS step (Pregibon 1981; Hosmer, Lemeshow & Sturdivant, 3rd ed.,
 * ch. 5). From the kept R factor by forward substitution, never an
 * inverse; no allocation. NaN when the fit has no finite coefficients
 * (separation without ridge) or the last logistic_set_beta failed. */
double logistic_leverage(const logistic_model *m, const long double *x);

#endif
