/*
 * run.h: one job from its file to its workbook: read the job, read the
 * tables, build the design, fit, lay out the report, write it. The only
 * place the engine and io meet; main() calls it and does nothing else but
 * parse the command line and print.
 */
#ifndef ROWFIT_RUN_H
#define ROWFIT_RUN_H

#include <stddef.h>

#include "../io/error.h"

/* Called as each stage of a run ends: what was done, on how many rows, in
 * how many seconds. main() prints it when stderr is a terminal. */
typedef void (*run_progress)(void *ctx, const char *stage, size_t rows,
                             double seconds);

/* Called after each epoch of training a network (every restart, every
 * fold): for a progress line on a terminal. */
typedef void (*run_epoch)(void *ctx, long epoch, double train_loss,
                          double valid_loss);

typedef struct run_options {
    const char *output;  /* -o PATH, or NULL for the job's own choice */
    int check_only;      /* `rowfit check`: read and check, fit nothing, write nothing */
    int force;           /* --force */
    run_progress progress;  /* NULL: none */
    void *progress_ctx;
    run_epoch epoch;        /* NULL: none; gets progress_ctx */
} run_options;

/* What a run did, for the line main() prints. */
typedef struct run_result {
    char written[4096];  /* the workbook's path; empty for check_only */
    size_t rows_fitted, rows_estimated, rows_skipped, terms;
} run_result;

/* Runs the job file at path. Warnings are appended to warn. */
rf_status run_job(const char *path, const run_options *opt, rf_warnings *warn,
                  run_result *res, rf_error *err);

#endif
