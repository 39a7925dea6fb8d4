/*
 * job.h: the job file: parsing and checking every directive of the job-file
 * language (docs/job-file.md) into a job record. Knows the language, not the
 * data: checks against columns happen in design.c, which has the tables.
 */
#ifndef ROWFIT_JOB_H
#define ROWFIT_JOB_H

#include <stddef.h>

#include "../io/error.h"

typedef enum job_model { MODEL_NONE = 0, MODEL_LINEAR, MODEL_LOGISTIC,
                         MODEL_NETWORK } job_model;
typedef enum job_missing { MISSING_SKIP = 0, MISSING_STOP } job_missing;
typedef enum job_solver { SOLVER_DEFAULT = 0, SOLVER_EXACT, SOLVER_GRADIENT,
                          SOLVER_LBFGS, SOLVER_ADAM } job_solver;

/* Limits of the language, each with its reason. */
#define JOB_HIDDEN_MAX 4  /* hidden layers a network may have */
#define JOB_UNITS_MAX 1000   /* units per hidden layer: a network for a table
                                of office size needs tens; 1000 already costs
                                minutes per epoch (common practice) */
#define JOB_HIDDEN_DEFAULT 8 /* units in the one hidden layer when `hidden`
                                is not given (contract section 2) */
#define JOB_FOLDS_MAX 1048576 /* one fold per row of a sheet: leave-one-out
                                on any table (a linear fit without a penalty
                                updates one QR; other fits refit each fold,
                                which docs/job-file.md prices) */
#define JOB_RESTARTS_MAX 100 /* each restart is a full network fit */
#define JOB_HEADER_MAX 1048576 /* the last row a spreadsheet can have */
#define JOB_FILE_MAX (1L << 20) /* a job is a few dozen lines; a bigger file
                                   is not a job file */

/* A table to read: `data` or `score`. */
typedef struct job_table {
    char *path;      /* as written in the job (for messages) */
    char *resolved;  /* relative to the job file's folder */
    char *sheet;     /* NULL = first sheet; a name or a 1-based number */
    int header;      /* 0 = first non-blank row */
    char delimiter;  /* 0 = detect */
    int line;        /* job line of the directive, 0 if absent */
} job_table;

/* A name given in the job (a column, a derived name), with its line. */
typedef struct job_name {
    char *name;
    int line;
} job_name;

typedef struct job_derive {
    char *name;
    char *formula;  /* the text after '=', trimmed, trailing comment cut */
    int line;
} job_derive;

typedef struct job_report {
    char *kind;     /* "ratio-study" or "selection-rates" */
    char *by;       /* selection-rates: the grouping column */
    int line;
} job_report;

typedef struct job {
    char *file;     /* the job file as named on the command line */
    char *dir;      /* its folder, for resolving paths */
    char *text;     /* the whole text, for the Job sheet */
    char *name;     /* `job`, else the file's base name without extension */
    int name_line;

    job_table data, score;        /* score.path == NULL when absent */
    job_name target;              /* target.name == NULL until given */
    job_name *inputs;     size_t n_inputs;
    job_name *categories; size_t n_categories;
    job_derive *derives;  size_t n_derives;
    job_name id;                  /* id.name == NULL when absent */
    char *output;                 /* as written; NULL = NAME-results.xlsx */
    char *output_resolved;        /* the path the workbook goes to */
    int output_line;

    job_model model;  int model_line;
    job_missing missing;
    int intercept;                /* 1 = yes (default) */
    double ridge;    int ridge_auto;  int ridge_line;
    char *positive;  int positive_line;
    double threshold; int threshold_line;
    double level;    int level_line;
    int folds;       int folds_line;   /* -1 = default (see docs) */
    unsigned long seed;
    int hidden[JOB_HIDDEN_MAX]; int n_hidden; int hidden_line;
    job_solver solver; int solver_line;
    double rate;     int rate_line;    /* 0 = default */
    long epochs;     int epochs_line;  /* 0 = default */
    int restarts;    int restarts_line;
    job_report *reports; size_t n_reports;
} job;

/* Reads and parses the job file at path. On success *out is a new job
 * (caller frees with job_free). Errors are RF_EINPUT with where "FILE:LINE"
 * (unknown keyword with the nearest keyword suggested, bad argument, a
 * required directive missing, a directive given twice where it may not be,
 * a feature not available yet), or RF_ESYSTEM when the file cannot be read. */
rf_status job_read(const char *path, job **out, rf_error *err);

/* As job_read, from text already in memory; path names it in messages and
 * fixes the folder that relative paths start from. */
rf_status job_parse(const char *text, const char *path, job **out,
                    rf_error *err);

void job_free(job *j);  /* accepts NULL */

const char *job_model_name(job_model m);  /* "linear", ... */

/* The nearest of n candidate names to name by edit distance (case-
 * insensitive), or NULL when none is close enough to be a plausible typo.
 * Distance is the optimal-string-alignment form of Damerau-Levenshtein
 * (insert, delete, replace, swap two neighbours), counted in bytes, ASCII
 * letters folded to lower case. A candidate is close enough when the
 * distance is at most max(1, L/3), L the longer of the two lengths; on a
 * tie the earlier candidate wins. Names longer than 64 bytes get no
 * suggestion (the rule is for typos, and it keeps the work on the stack). */
const char *job_nearest(const char *name, const char *const *candidates,
                        size_t n);

#endif
