/*
 * design.h: from a job and its tables to the numbers a model fits: derived
 * columns evaluated per row, numeric inputs, categories as indicator
 * columns, the intercept, and for every input row its fate (fitted,
 * estimated, or skipped with one reason). All checks of the job against the
 * columns happen here (unknown names, with the nearest suggested). Knows
 * tables and the job, not models or workbooks.
 */
#ifndef ROWFIT_DESIGN_H
#define ROWFIT_DESIGN_H

#include <stddef.h>

#include "../io/error.h"
#include "../io/table.h"
#include "job.h"

#define DESIGN_NO_REFERENCE ((size_t)-1)

typedef enum design_status { ROW_FITTED, ROW_ESTIMATED, ROW_SKIPPED } design_status;

typedef enum design_source { SOURCE_DATA = 0, SOURCE_SCORE = 1 } design_source;

/* One input row, in output order: data rows in input order, then score. */
typedef struct design_row {
    design_source source;
    design_status status;
    size_t row;          /* index in its table */
    size_t index;        /* row of X (fitted) or of Xe (estimated) */
    char *reason;        /* skipped: why (owned by the design), else NULL */
} design_row;

/* A model input as the job names it, with its value in every output row. */
typedef struct design_input {
    char *name;
    int is_category;
    int line;             /* job line that named it */
    long double *value;   /* numeric: per output row; NaN when unusable */
    const char **level;   /* category: per output row, the level text
                             (owned by the design), NULL when unusable */
    char **levels;        /* category: levels seen in fitted rows, sorted */
    size_t n_levels;
    size_t reference;     /* category: index of the reference level, or
                             DESIGN_NO_REFERENCE (first category of a
                             model without intercept: every level a term) */
    size_t first_term;    /* index of the input's first term */
    long derive;          /* the job's derive that computes it, or -1 */
} design_input;

typedef struct design {
    size_t p;             /* terms */
    char **term;          /* "(intercept)", "living_area", "district: Oakmere" */
    int intercept;

    size_t n_fit;         /* fitted rows */
    long double *X, *y;   /* n_fit x p row-major, n_fit */
    size_t n_est;         /* rows to estimate */
    long double *Xe;      /* n_est x p */

    size_t n_rows;        /* all input rows, data then score */
    design_row *rows;
    long double *target;  /* per output row: the target's value, NaN if none */

    size_t n_inputs;      /* inputs and categories, in job order */
    design_input *inputs;

    size_t rows_skipped;
    long target_col;      /* the target's column in data, -1 if derived */
    long id_col_data, id_col_score;  /* id column, -1 if none */
    /* model logistic: the target's two classes; target[] is 1 for the
     * positive class and 0 for the other in fitted rows */
    int binary;
    const char *positive, *negative;  /* class labels as the data shows them */
    size_t n_positive, n_negative;    /* among the fitted rows */
    const char **label;   /* per output row: the class label, or NULL */

    struct formula **formulas;  /* the job's derives, parsed, in job order */
    size_t n_formulas;
    void *store;          /* private: the interned level strings */
    void *class_store;    /* private: the interned class labels */
} design;

/* Builds the design. score may be NULL; warn must not be. Errors (RF_EINPUT) name the job
 * line or the cell: an unknown column (with a suggestion), a derive that
 * does not parse, a name defined twice, an unusable cell under
 * `missing stop`, too few usable rows. Warnings (a category with a single
 * level, an id missing from the score table) go to warn. */
rf_status design_build(const job *j, const table *data, const table *score,
                       design **out, rf_warnings *warn, rf_error *err);
void design_free(design *d);  /* accepts NULL */

/* How many terms an input has: 1 for a number; for a category its levels
 * less the reference (all of them with DESIGN_NO_REFERENCE). */
size_t design_input_terms(const design_input *in);

/* The level of a category term: term k of the design, k in
 * [in->first_term, in->first_term + design_input_terms(in)). */
const char *design_term_level(const design_input *in, size_t k);

/* The row's values of X (fitted) or Xe (estimated) rows; NULL if skipped. */
const long double *design_row_x(const design *d, size_t out_row);

#endif
