/*
 * fit.h: the job's model fitted to its design: the exact linear or
 * logistic fit, a ridge penalty (given, or chosen by cross-validation),
 * solver gradient, k-fold cross-validation, the classification measures
 * and the regression diagnostics. Knows the job and the design, not
 * tables or workbooks: report.h lays out what it gives.
 */
#ifndef ROWFIT_FIT_H
#define ROWFIT_FIT_H

#include <stddef.h>

#include "../io/error.h"
#include "classify.h"
#include "design.h"
#include "diagnose.h"
#include "gradient.h"
#include "job.h"
#include "linear.h"
#include "logistic.h"
#include "network.h"
#include "validate.h"

/* Cross-validation, as it was run. */
typedef struct fit_cv {
    size_t k;                  /* folds */
    unsigned long seed;
    int stratified;            /* folds stratified by class */
    const double *pred;        /* per fitted row (design order): the
                                  out-of-fold estimate or probability, NaN
                                  when its fold could not be fitted */
    size_t refits;             /* linear: folds refitted, not updated */
    size_t failed;             /* folds whose fit failed (no estimates) */
    const size_t *fold_id;     /* res->folds[c] is fold fold_id[c] (0-based)
                                  of the k: failed folds are not measured */
    const char *method;        /* how the folds were fitted, for a note */
    const validate_result *res;        /* NULL: fewer than 2 folds measured */
    const validate_calibration *cal;   /* yes/no targets, else NULL */
    /* ridge auto: the path over the whole data, and the choice */
    size_t G;
    const double *grid, *mean, *se;
    size_t best, chosen;
} fit_cv;

/* What was fitted. Exactly one of linear, logistic and network is set; with
 * solver gradient it carries the gradient's coefficients (set with
 * linear_set_beta or logistic_set_beta) and gradient says how the descent
 * ran. */
typedef struct fit_result {
    const linear_model *linear;
    const logistic_model *logistic;
    const gradient_model *gradient;  /* solver gradient, else NULL */
    double agree_digits;   /* gradient: significant digits its coefficients
                              share with the exact solver's for the same
                              problem (penalty included) */
    const classify_measures *cm;     /* logistic: fitted rows' measures */
    const fit_cv *cv;             /* folds > 0, else NULL */
    double ridge;                    /* the penalty fitted (the job's, or
                                        the one ridge auto chose), or 0 */
    const diagnose_result *diag;     /* per fitted row; NULL (network) */
    const double *vif;               /* linear: per term, else NULL */
    int classify;                    /* a yes/no target */
    /* model network (linear and logistic are NULL then) */
    const network_model *network;
    const double *fitted;    /* per fitted row: estimate or probability */
    const double *importance;        /* per design input */
    double r2, rmse, mae;            /* numeric target, fitted rows */
} fit_result;

typedef struct fit fit;

/* Fits the job's model to the design: the exact fit (separation and
 * non-convergence are RF_EINPUT at the model line, with what to do), ridge
 * auto's choice, cross-validation (`folds`, default 5 from 50 fitted
 * rows), the penalised fit, solver gradient (RF_EINPUT when it does not
 * converge), classification measures, diagnostics. Warnings (dropped
 * terms, near-collinear inputs, folds that could not be fitted) go to
 * warn. *out is new (fit_free), NULL on error. */
rf_status fit_job(const job *j, const design *d, network_progress epoch,
                  void *ctx, fit **out, rf_warnings *warn, rf_error *err);
void fit_free(fit *f);  /* accepts NULL */

/* What was fitted, for report_write; valid while f lives. */
const fit_result *fit_report(const fit *f);

#endif
