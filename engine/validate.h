/*
 * validate.h: the model-agnostic parts of k-fold cross-validation: which
 * fold each row belongs to, the per-fold and pooled measures of out-of-fold
 * predictions, a calibration table of predicted risk, and the choice of a
 * ridge penalty by the one-standard-error rule. Not the refits: the caller
 * fits its model (linear, logistic, network) on the rows outside each fold
 * and hands the out-of-fold predictions here. Knows arrays, not tables.
 */
#ifndef ROWFIT_VALIDATE_H
#define ROWFIT_VALIDATE_H

#include <stddef.h>

#include "../io/error.h"
#include "classify.h"

/* The measures of a fold, in the order of validate_result's arrays. */
enum {
    VALIDATE_RMSE = 0, VALIDATE_MAE = 1, VALIDATE_R2 = 2,          /* numeric */
    VALIDATE_ACCURACY = 0, VALIDATE_AUC = 1, VALIDATE_LOGLOSS = 2, /* yes/no */
    VALIDATE_MEASURES = 3
};

/* Assigns each of n rows a fold, 0 to k - 1, into fold (caller's, n
 * entries).
 *
 * Rows are shuffled by GSL's Mersenne Twister (gsl_rng_mt19937, set with
 * seed by gsl_rng_set, then gsl_ran_shuffle) and dealt round-robin: the
 * j-th row of the shuffled order goes to fold j mod k, so the first n mod k
 * folds have one row more than the others. With cls (n values, each 0 or
 * 1) the folds are stratified: the rows of class 0, then those of class 1,
 * each in row order, are shuffled (one generator, class 0 first) and dealt
 * on from where the previous class stopped. Every fold's size then differs
 * from every other's by at most 1, and so does each class's count. A class
 * with fewer rows than k (say 3 positives, 5 folds) puts its rows in as
 * many different folds (3) and none in the others; this is not an error,
 * but those folds hold one class only, so their AUC is undefined (see
 * validate_measure). With cls all one class the folds are the unstratified
 * ones (same rows, same draws).
 *
 * k = n is leave-one-out: row i is fold i, with no shuffle (seed and cls
 * do not matter). Same n, k, seed and cls give the same folds on every
 * run and machine (the generator is GSL's, not the C library's).
 *
 * GSL's generator uses the low 32 bits of seed, and seed 0 is the same as
 * seed 4357 (GSL's default seed for it, doc/rng.rst): seeds equal modulo
 * 2^32, and 0 with 4357, give the same folds.
 *
 * Errors: RF_EINPUT for k < 2, k > n, a cls value not 0 or 1; RF_ENOMEM.
 * On error fold is unspecified. */
rf_status validate_folds(size_t n, size_t k, unsigned long seed,
                         const double *cls, size_t *fold, rf_error *err);

typedef struct validate_fold {
    size_t rows;
    double m[VALIDATE_MEASURES];   /* NaN where undefined (see below) */
} validate_fold;

typedef struct validate_result {
    size_t k;
    int classify;
    validate_fold *folds;          /* k */
    /* numeric: rmse, mae, r squared; classify: accuracy, auc, log loss */
    double mean[VALIDATE_MEASURES];   /* over the folds where defined */
    double sd[VALIDATE_MEASURES];     /* divisor used - 1; NaN if used < 2 */
    size_t used[VALIDATE_MEASURES];   /* folds where the measure is defined */
    double pooled[VALIDATE_MEASURES]; /* over all n rows at once */
    classify_measures all;  /* classify: every measure of the pooled rows,
                               with the confusion matrix at the threshold;
                               zeroed for numeric */
} validate_result;

/* Per-fold and pooled measures of out-of-fold predictions pred (n) against
 * y (n), fold[i] in 0..k-1 the fold of row i (every fold non-empty).
 *
 * Numeric (classify 0), e = y - pred, over a fold's rows or, pooled, over
 * all rows: rmse = sqrt(sum e^2 / rows), mae = sum |e| / rows, r squared =
 * 1 - sum e^2 / sum (y - ybar)^2. A fold's r squared takes ybar as the mean
 * of that fold's y: the r squared its rows would give as a test set of
 * their own (common practice); it is NaN when the fold's y are all equal,
 * so leave-one-out has none. The pooled r squared is 1 - PRESS / TSS, PRESS
 * the sum of squared out-of-fold errors and TSS about the mean of all n
 * y: the prediction r squared of the PRESS statistic (Allen 1974,
 * Technometrics 16:125; Montgomery, Peck & Vining, Introduction to Linear
 * Regression Analysis, 5th ed., sec. 4.3; both from memory), with the
 * out-of-fold errors in place of leave-one-out ones, centred even for a
 * model without intercept (common practice).
 * It can be negative: out-of-fold predictions can be worse than the mean.
 *
 * Classify (classify 1): y are 0 or 1 and pred probabilities in [0, 1];
 * accuracy at threshold (p >= threshold is a yes), AUC and log loss as
 * classify_measure gives them, per fold and pooled. A fold with one class
 * only has no AUC (NaN). The pooled AUC ranks rows scored by different
 * fold models against one another (common practice; it can differ from the
 * mean of the folds' AUCs).
 *
 * mean and sd are over the folds where a measure is defined (used[] of
 * them); mean is NaN when used is 0, sd when used < 2.
 *
 * Errors (RF_EINPUT): n = 0, k < 2 or k > n, a fold number >= k, a fold
 * with no rows, a y or pred not finite (numeric), a y not 0 or 1 or a pred
 * outside [0, 1] or a threshold not finite (classify); RF_ENOMEM. Rows are
 * named 1-based in messages. *out is a new result (validate_free) on
 * RF_OK, NULL on error. */
rf_status validate_measure(const double *y, const double *pred,
                           const size_t *fold, size_t n, size_t k,
                           int classify, double threshold,
                           validate_result **out, rf_error *err);
void validate_free(validate_result *r);  /* accepts NULL */

/* A calibration table: rows grouped by predicted probability. */
typedef struct validate_calibration {
    size_t groups;      /* groups formed, lowest probabilities first */
    size_t *rows;       /* per group, rows in it (every group non-empty) */
    double *mean_p;     /* mean predicted probability */
    double *rate;       /* observed rate: positives / rows */
    double *p_low;      /* lowest and highest predicted probability */
    double *p_high;
} validate_calibration;

/* Groups the n rows by p into at most `groups` risk groups by
 * classify_risk_groups (the Hosmer-Lemeshow rule of classify.h, ties kept
 * together, no merging), and gives each group's rows, mean p, observed
 * rate of y = 1 and range of p. With groups = 10 the groups are those of
 * classify_measure's Hosmer-Lemeshow statistic before its merging of
 * groups whose p are all 0 or all 1.
 * Errors: RF_EINPUT for n = 0, groups 0 or above CLASSIFY_GROUPS_MAX, a y
 * not 0 or 1, a p outside [0, 1]; RF_ENOMEM. *out is new (free with
 * validate_calibration_free) on RF_OK, NULL on error. */
rf_status validate_calibrate(const double *y, const double *p, size_t n,
                             size_t groups, validate_calibration **out,
                             rf_error *err);
void validate_calibration_free(validate_calibration *c);  /* accepts NULL */

/* The ridge choice tolerates a cross-validated error this much above the
 * smallest (relative) in exchange for a smaller penalty. */
#define VALIDATE_CHOOSE_TOL 1e-3

/* The ridge choice. err: G x k, row-major, the cross-validation error of
 * penalty g (penalties in ascending order, the first usually 0) in fold j
 * at err[g k + j]; G >= 1, k >= 2. Fills mean[g] (mean over folds) and
 * se[g] (standard deviation with divisor k - 1, over sqrt(k)), caller's,
 * G entries each. *best = the penalty with the smallest mean error (the
 * smallest index on a tie). Returns the chosen penalty: the smallest whose
 * mean error is at most (1 + VALIDATE_CHOOSE_TOL) mean[best]. A penalty is
 * thus used only where it lowers the cross-validated error by more than
 * 0.1%: on inputs far from collinear the error curve is flat near 0 and
 * its minimum falls where noise puts it (and the one-standard-error rule
 * of Hastie, Tibshirani & Friedman, ESL 2nd ed. sec. 7.10, which takes
 * the largest penalty within a standard error of the best, shrinks every
 * coefficient by several per cent there: measured on invented
 * well-conditioned data, about one significant digit kept); on collinear
 * inputs a penalty lowers the error by 1-10% and is kept (rowfit's rule;
 * docs/methods.md shows the measurements). A penalty whose mean or se is
 * not finite (a refit that failed in some fold, passed as NaN) is never
 * best nor chosen; when no penalty has a finite mean and se, both *best
 * and the return value are G. */
size_t validate_choose(const double *err, size_t G, size_t k, double *mean,
                       double *se, size_t *best);

#endif
