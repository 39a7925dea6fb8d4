/*
 * diagnose.h: regression diagnostics, the fitted rows that deserve a second
 * look. Per row of a linear or logistic fit: leverage, studentized residual
 * and Cook's distance (with Pearson and deviance residuals for the logistic
 * model), flagged against the usual cut-offs; per term, the variance
 * inflation factor. Works from the fitted model and its design matrix in
 * O(n p^2) time, with O(n) memory for the row values and an n x p copy of
 * the columns for the VIF; never an n x n matrix, so a million rows are
 * fine. Not a test: a flag asks for a look at the row, never for its
 * removal. Knows matrices, not tables or workbooks.
 */
#ifndef ROWFIT_DIAGNOSE_H
#define ROWFIT_DIAGNOSE_H

#include <stddef.h>

#include "../io/error.h"
#include "linear.h"
#include "logistic.h"

/* Flags of a row, ORed. The cut-offs are common practice, not tests at a
 * stated level: leverage above twice its mean p/n (Belsley, Kuh & Welsch,
 * Regression Diagnostics, 1980, ch. 2); a studentized residual beyond 3
 * in absolute value (under normal errors about 0.27% of rows, 2(1 -
 * Phi(3)) = 0.0027); Cook's distance above 4/n (common practice). p is
 * the number of terms estimated (the rank), n of fitted rows. */
#define DIAGNOSE_HIGH_LEVERAGE 1u  /* leverage > 2p/n */
#define DIAGNOSE_OUTLIER 2u        /* |studentized residual| > 3 */
#define DIAGNOSE_INFLUENTIAL 4u    /* Cook's distance > 4/n */
#define DIAGNOSE_FLAGS 3           /* how many flags there are */

#define DIAGNOSE_STUDENT_CUT 3.0

/* A leverage this close to 1 counts as 1: the row is fitted exactly by a
 * term of its own (a category level seen in that row only), its residual
 * is rounding noise, and dividing by 1 - h would report the noise as a
 * residual of any size. The studentized residual and Cook's distance of
 * such a row are NaN. */
#define DIAGNOSE_LEVERAGE_ONE 1e-10

/* Per fitted row (n each, in the order of the rows of X). Values that are
 * undefined are NaN (see diagnose_linear and diagnose_logistic for
 * when); the caller writes them as blanks. */
typedef struct diagnose_result {
    size_t n, p;              /* fitted rows, terms estimated (rank) */
    double *leverage;         /* diagonal of the hat matrix */
    double *student;          /* linear: externally studentized residual;
                                 logistic: standardized Pearson residual */
    double *cooks;            /* Cook's distance */
    double *pearson;          /* logistic only, else NULL */
    double *deviance;         /* logistic only, else NULL */
    unsigned *flag;           /* DIAGNOSE_* bits */
    double leverage_cut;      /* 2p/n */
    double student_cut;       /* DIAGNOSE_STUDENT_CUT */
    double cooks_cut;         /* 4/n */
    size_t n_flagged[DIAGNOSE_FLAGS];  /* rows with each flag: high
                                          leverage, outlier, influential */
} diagnose_result;

/* Diagnostics of a linear fit. X is the n x p design the model was fitted
 * on (row-major); m may have come through linear_set_beta. Definitions,
 * with e_i the residual, h_i the leverage, s^2 = RSS / (n - p):
 *   leverage h_i = x_i'(X'X)^-1 x_i, from linear_leverage (the kept R);
 *   externally studentized residual t_i = e_i / (s_(i) sqrt(1 - h_i)),
 *     s_(i)^2 = (RSS - e_i^2 / (1 - h_i)) / (n - p - 1) the residual
 *     variance without row i (Belsley, Kuh & Welsch 1980, ch. 2);
 *   Cook's distance D_i = e_i^2 h_i / (p s^2 (1 - h_i)^2) (Cook, "Detection
 *     of influential observation in linear regression", Technometrics 19
 *     (1977) 15-18; Cook & Weisberg, Residuals and Influence in
 *     Regression, 1982).
 * NaN: t_i and D_i where h_i counts as 1 (DIAGNOSE_LEVERAGE_ONE) or the fit
 * is exact (RSS 0); t_i when n - p - 1 = 0. t_i is +-infinity when
 * the other rows are fitted exactly and row i is not (s_(i) = 0).
 * *out is new (diagnose_free). Errors: RF_ENOMEM. */
rf_status diagnose_linear(const linear_model *m, const long double *X,
                          diagnose_result **out, rf_error *err);

/* Diagnostics of a logistic fit (Pregibon, "Logistic regression
 * diagnostics", Ann. Statist. 9 (1981) 705-724; Hosmer, Lemeshow &
 * Sturdivant, Applied Logistic Regression, 3rd ed., 2013, ch. 5). X and
 * y (0 or 1) as given to logistic_fit; m may have come through
 * logistic_set_beta. With p_i the fitted probability:
 *   Pearson residual r_i = (y_i - p_i) / sqrt(p_i (1 - p_i));
 *   deviance residual sign(y_i - p_i) sqrt(-2 [y_i ln p_i
 *     + (1 - y_i) ln(1 - p_i)]);
 *   leverage h_i = p_i (1 - p_i) x_i'(X'WX + P)^-1 x_i, from
 *     logistic_leverage (P the ridge penalty, 0 without ridge);
 *   studentized residual: the standardized Pearson residual
 *     r_i / sqrt(1 - h_i);
 *   Cook's distance r_i^2 h_i / (p (1 - h_i)^2).
 * NaN: every value when the fit has no finite coefficients (separation
 * without ridge); the studentized residual and Cook's distance where h_i
 * counts as 1. *out is new (diagnose_free). Errors: RF_ENOMEM. */
rf_status diagnose_logistic(const logistic_model *m, const long double *X,
                            const double *y, diagnose_result **out,
                            rf_error *err);

void diagnose_free(diagnose_result *d);  /* accepts NULL */

/* The flags in words into buf (n bytes, truncated to fit, always
 * terminated when n > 0): "high leverage", "outlier", "influential",
 * joined by "; " in that order; "" when none. */
void diagnose_flag_text(unsigned flag, char *buf, size_t n);

/* Variance inflation factor of each kept non-intercept term into vif (p
 * values): VIF_j = 1 / (1 - R_j^2), R_j^2 that of term j regressed on the
 * other kept terms, with the intercept when intercept is set (column 0 of
 * X, then excluded) and uncentred without one (Montgomery, Peck & Vining,
 * Introduction to Linear Regression Analysis, ch. 9, sec. 9.4). NaN
 * for the intercept, dropped terms (drop[j] != LINEAR_KEPT; drop as the
 * fit left it), a kept term that is constant (zero without intercept),
 * and every term when fewer than two are left; infinity for every term
 * when the terms are exactly dependent after centring (not possible with
 * the drops of a fit). Computed without X'X: see diagnose.c. X is n x p
 * row-major. Errors: RF_ENOMEM, RF_ESYSTEM (the QR factorization
 * failed). */
rf_status diagnose_vif(const long double *X, size_t n, size_t p,
                       int intercept, const linear_drop *drop, double *vif,
                       rf_error *err);

#endif
