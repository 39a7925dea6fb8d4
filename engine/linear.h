/*
 * linear.h: ordinary least squares for the linear model. Householder QR with
 * column pivoting decides the rank; terms that add nothing are dropped and
 * reported with the reason; the solution, the residuals and the covariance
 * are refined with extended-precision residuals. Gives every measure of the
 * Summary sheet and prediction intervals. Knows matrices, not tables, names
 * or workbooks.
 */
#ifndef ROWFIT_LINEAR_H
#define ROWFIT_LINEAR_H

#include <stddef.h>

#include <gsl/gsl_matrix.h>

#include "../io/error.h"

/* Why a term has no estimate. */
typedef enum linear_drop {
    LINEAR_KEPT = 0,
    LINEAR_DROP_ZERO,       /* every fitted value of the term is 0 */
    LINEAR_DROP_CONSTANT,   /* the same value in every fitted row, and there
                               is an intercept */
    LINEAR_DROP_COLLINEAR   /* a combination of earlier terms (see with[]) */
} linear_drop;

#define LINEAR_WITH_MAX 4  /* terms named in a collinearity note */

/* Terms a linear model may have: the refinement keeps per-term sums on the
 * stack, and a spreadsheet user's model with more terms than this is far
 * past what the rows of a sheet can support. */
#define LINEAR_RANK_MAX 512

/* Relative tolerance of the rank decision: after each column is scaled to
 * unit length (by a power of two, so exactly), a term is dropped when what
 * it adds beyond the earlier terms, |R_kk|, is below LINEAR_RANK_TOL times
 * |R_11|. A column that is a combination of others up to rounding (2*x, or
 * x1 + x2 read from a file) adds about 1e-16 and is dropped; designs well
 * past NIST's hardest (Filip, scaled condition 6.5e9; Filip's x shifted or
 * of degree 13, condition up to 7e12) are kept and solved to 8+ digits
 * (measured against exact rational arithmetic), with a warning. */
#define LINEAR_RANK_TOL 1e-13

typedef struct linear_model {
    size_t n, p, rank;
    int intercept;          /* column 0 is the constant term */
    double level;           /* confidence level of the intervals */
    double rank_tol;        /* LINEAR_RANK_TOL, as used */

    /* Per term, p entries; NaN where a term was dropped or a value has no
     * meaning (no residual degrees of freedom). */
    double *beta, *se, *t, *pvalue, *low, *high;
    linear_drop *drop;
    size_t *with;           /* p * LINEAR_WITH_MAX term indices */
    size_t *n_with;         /* how many of with[] are set for each term */

    /* Fit measures (see docs/workbook.md for definitions). */
    double rss, tss;        /* tss is uncentred without an intercept */
    double r2, adj_r2, sigma, rmse, mae;
    double fstat, fpvalue;  /* NaN when undefined (no regression df) */
    double df_resid, df_model;
    double loglik, aic, bic;
    double cond;            /* condition number estimate of the scaled design */
    int refine_steps;       /* refinement steps taken for the solution */
    int refine_converged;   /* 0: accuracy may be below double precision */
    double tcrit;           /* t quantile for the intervals */

    double *residual;       /* n: y - X beta for the fitted rows */

    /* Private to linear.c: the factor for prediction variances. */
    double *R;              /* rank x rank, pivoted, scaled */
    size_t *cols;           /* rank: design column of each pivoted R column */
    double *scale;          /* p: the power-of-two column scales */
} linear_model;

/* Fits y (n) on X (n x p, row-major; column 0 all ones when intercept).
 * Extended precision in: a derived column such as x^10 carries the digits
 * that a double would round away, and on ill-conditioned designs those
 * digits decide the answer (NIST Filip: 7.6 correct digits from powers
 * rounded to double, 10+ from extended ones).
 * level is the confidence level in (0, 1). Errors (RF_EINPUT): fewer rows
 * than terms plus one, non-finite values. *out is the new model. */
rf_status linear_fit(const long double *X, const long double *y, size_t n, size_t p,
                     int intercept, double level, linear_model **out,
                     rf_error *err);
void linear_free(linear_model *m);  /* accepts NULL */

/* Replaces the coefficients with beta (p values from another solver of the
 * same problem, such as gradient descent; entries of dropped terms are
 * ignored) and recomputes the residuals and every fit measure from them.
 * What belongs to the least-squares solution alone is cleared to NaN:
 * standard errors, t, p values, intervals, and linear_predict's low and
 * high. X and y as given to linear_fit. */
void linear_set_beta(linear_model *m, const long double *X,
                     const long double *y, const double *beta);

/* RF_EINPUT (filled into err) for a model with no terms or more than
 * LINEAR_RANK_MAX, the limit every model that decides its rank here
 * shares; RF_OK otherwise. */
rf_status linear_terms_check(size_t p, rf_error *err);

/* (R'R)^-1 = R^-1 R^-T, with R the upper triangle in the first r rows and
 * columns of QR (a GSL QR factor), into cov (r x r, R's column order), the
 * products summed in extended precision. 0, or -1 on no memory or a
 * singular R. Shared by the models that factor with QR. */
int linear_cov_from_r(const gsl_matrix *QR, size_t r, double *cov);

/* Correct significant digits to expect in the coefficients, from the
 * condition number and extended-precision refinement: floor(-log10(cond *
 * 2^-63)), between 0 and 15. */
int linear_accurate_digits(const linear_model *m);

/* x'(X'X)^-1 x for a row x (p values, same columns as X), over the kept
 * terms: a fitted row's leverage (the diagonal of the hat matrix), from R,
 * never from the inverse. Allocates nothing. */
double linear_leverage(const linear_model *m, const long double *x);

/* Cross-validation of the fitted model m (X, y as given to linear_fit):
 * for every fitted row i, pred[i] is the estimate of the fit to the rows
 * outside its fold fold[i] (0..k-1). No refit where an update is exact:
 * from m's QR factor, the held-out residuals of fold F are
 * (I - H_FF)^-1 e_F (Woodbury), O(n r^2) for all folds together; k = n is
 * leave-one-out, e_i / (1 - h_i). A fold whose training rows lose a
 * direction of the design (a category level seen only in that fold) is
 * refitted with linear_fit, which drops what those rows cannot estimate;
 * *refits counts them. Errors: RF_EINPUT for k outside 2..n or a fold out
 * of range; what linear_fit gives on a refit; RF_ENOMEM. */
rf_status linear_cv(const linear_model *m, const long double *X,
                    const long double *y, const size_t *fold, size_t k,
                    double *pred, size_t *refits, rf_error *err);

/* The estimate for a row x (p values, same columns as X) and its prediction
 * interval at the model's level. low/high are NaN when there are no
 * residual degrees of freedom. */
void linear_predict(const linear_model *m, const long double *x, double *est,
                    double *low, double *high);

#endif
