/*
 * report.h: lays out the result workbook of a fitted job: the Estimates,
 * Coefficients, Summary and Job sheets with the labels of docs/workbook.md,
 * for linear and logistic models fitted by either solver.
 * Knows what the sheets mean; io/writer.c knows how cells reach the file.
 */
#ifndef ROWFIT_REPORT_H
#define ROWFIT_REPORT_H

#include <stddef.h>

#include "../io/error.h"
#include "../io/fileinfo.h"
#include "../io/table.h"
#include "../io/writer.h"
#include "design.h"
#include "job.h"
#include "classify.h"
#include "diagnose.h"
#include "gradient.h"
#include "linear.h"
#include "logistic.h"
#include "validate.h"

/* Run facts for the Job sheet. */
typedef struct report_facts {
    const char *version;
    const char *started;         /* local date and time, ISO 8601 */
    const char *files[3];        /* job, data, score (NULL when absent) */
    fileinfo info[3];
    const rf_warnings *warnings;
} report_facts;

/* Cross-validation, as the report shows it. */
typedef struct report_cv {
    size_t k;                  /* folds */
    unsigned long seed;
    int stratified;            /* folds stratified by class */
    const double *pred;        /* per fitted row (design order): the
                                  out-of-fold estimate or probability, NaN
                                  when its fold could not be fitted */
    size_t refits;             /* linear: folds refitted, not updated */
    size_t failed;             /* folds whose fit failed (no estimates) */
    const char *method;        /* how the folds were fitted, for a note */
    const validate_result *res;        /* NULL: fewer than 2 folds measured */
    const validate_calibration *cal;   /* yes/no targets, else NULL */
    /* ridge auto: the path over the whole data, and the choice */
    size_t G;
    const double *grid, *mean, *se;
    size_t best, chosen;
} report_cv;

/* What was fitted. Exactly one of linear and logistic is set; with
 * solver gradient it carries the gradient's coefficients (set with
 * linear_set_beta or logistic_set_beta) and gradient says how the descent
 * ran. */
typedef struct report_model {
    const linear_model *linear;
    const logistic_model *logistic;
    const gradient_model *gradient;  /* solver gradient, else NULL */
    double agree_digits;   /* gradient: significant digits its coefficients
                              share with the exact solver's (NaN when not
                              compared: a penalised linear fit) */
    const classify_measures *cm;     /* logistic: fitted rows' measures */
    const report_cv *cv;             /* folds > 0, else NULL */
    double ridge;                    /* the penalty fitted (the job's, or
                                        the one ridge auto chose), or 0 */
    const diagnose_result *diag;     /* per fitted row */
    const double *vif;               /* linear: per term, else NULL */
} report_model;

/* Writes every sheet of the job into w. Warnings found while writing (a
 * value that could not be written) are appended to warn before the Job
 * sheet lists them. */
rf_status report_write(writer *w, const job *j, const table *data,
                       const table *score, const design *d,
                       const report_model *rm, const report_facts *facts,
                       rf_warnings *warn, rf_error *err);

#endif
