/*
 * formula.h: the formula language of `derive` (docs/job-file.md): numbers,
 * column names, 'text', + - * / ^, = <> < <= > >=, and LN LOG10 EXP SQRT
 * ABS MIN MAX ROUND IF YEAR MONTH DAY. Parses once, evaluates per row, and
 * prints itself back as a spreadsheet formula so the workbook can carry it
 * live. Precedence and rounding follow the OpenDocument formula standard
 * (OpenFormula, ISO/IEC 26300-2), so a live formula in the workbook gives
 * the value rowfit computed. Knows nothing of tables: values come in by
 * reference index.
 */
#ifndef ROWFIT_FORMULA_H
#define ROWFIT_FORMULA_H

#include <stddef.h>

#include "../io/error.h"

/* Limits, each with its reason. */
#define FORMULA_TEXT_MAX 8192   /* bytes of source: one job line, and the most
                                   a live workbook formula may hold (8192
                                   characters in common spreadsheets, from
                                   memory) */
#define FORMULA_DEPTH_MAX 64    /* nesting of parentheses, calls and signs:
                                   the parser recurses once per level */
#define FORMULA_STACK_MAX 256   /* values held at once while evaluating: the
                                   evaluator keeps them in a fixed array so a
                                   row costs no allocation */

typedef enum fvalue_type { FV_BLANK = 0, FV_NUMBER, FV_TEXT, FV_ERROR } fvalue_type;

/* A value in or out of a formula. Dates and yes-no values are numbers
 * (serial day; 1/0). text is borrowed: the caller's or the formula's own. */
typedef struct fvalue {
    fvalue_type type;
    /* Extended precision: a derived x^10 must keep the digits a double
     * would round away (ill-conditioned designs depend on them); evaluate
     * with the long double functions (powl, logl, ...). */
    long double num;
    const char *text;  /* FV_TEXT; FV_ERROR: the error as shown ("#N/A") */
} fvalue;

typedef struct formula formula;

/* Parses src. where names the place for messages (the job line); the
 * message says what is wrong and near which character. *out is a new
 * formula (caller frees) or NULL on error (RF_EINPUT). */
rf_status formula_parse(const char *src, const char *where, formula **out,
                        rf_error *err);
void formula_free(formula *f);  /* accepts NULL */

/* The distinct column names the formula refers to, in order of first use.
 * formula_eval takes their values in this order. */
size_t formula_nrefs(const formula *f);
const char *formula_ref(const formula *f, size_t i);

/* Evaluates f with refs[i] the value of formula_ref(f, i). Returns 0 and
 * sets *out (a number or text), or -1 with why filled ("division by zero",
 * "LN of -3", "bathrooms is blank", "age is 'n/a', not a number"); why may
 * be NULL. Comparisons give 1 or 0; text compares without regard to ASCII
 * case and any number is less than any text. IF evaluates only the branch
 * it takes, so a blank there does not stop the row. */
int formula_eval(const formula *f, const fvalue *refs, fvalue *out,
                 char *why, size_t whylen);

/* The formula as a spreadsheet formula with a leading '=', each column
 * reference replaced by cells[i] (e.g. "C2"); function names as in
 * OpenFormula. Returns a malloc'd string (caller frees) or NULL on no memory. */
char *formula_spreadsheet(const formula *f, const char *const *cells);

#endif
