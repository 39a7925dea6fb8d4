/*
 * ridge.h: the exact ridge (L2-penalised) least-squares fit of a linear
 * model, and a ridge path that factors a set of rows once and then solves
 * for any penalty cheaply, to choose the penalty by cross-validation. The
 * penalty is the one gradient.h defines. Not the ordinary fit with its
 * measures and rank decisions (linear.h), nor the logistic model.
 */
#ifndef ROWFIT_RIDGE_H
#define ROWFIT_RIDGE_H

#include <stddef.h>

#include "../io/error.h"
#include "linear.h"   /* linear_drop, LINEAR_RANK_TOL, LINEAR_RANK_MAX */

/* Rows per block of the standardizing passes and of the streamed QR
 * factorization: small enough that a block (RIDGE_BLOCK x (terms + 1)
 * doubles) stays in cache, large enough that GSL's blocked update does real
 * work per call. At 1,000,000 rows by 10 terms and an intercept a path took
 * 0.21 s on one thread, with blocks of 64 to 4096 rows within the noise of
 * one another (a timing program linked against build/engine/ridge.o). */
#define RIDGE_BLOCK 512

/* The penalty grid of `ridge auto`: RIDGE_GRID values, 0 (ordinary least
 * squares) first, then RIDGE_GRID - 1 values n * 10^e with e evenly spaced
 * from RIDGE_GRID_LOW to RIDGE_GRID_HIGH. Why relative to n: the penalty
 * competes with the residual sum of squares, which grows with the rows,
 * while the standardized columns make Z'Z equal n times the columns'
 * correlation matrix (with an intercept; their second-moment matrix
 * without one), whose eigenvalues e_k sum to the number of terms. The fit
 * shrinks the k-th principal component of the standardized inputs by
 * e_k / (e_k + lambda / n) (Hastie, Tibshirani & Friedman, Elements of
 * Statistical Learning, 2nd ed., sec. 3.4.1, eq. 3.47). So lambda / n =
 * 1e-6 changes only directions that are nearly collinear, and 1e3 shrinks
 * every direction by a factor of at least (1000 + q) / q for q penalised
 * terms (e_k <= q): the standardized coefficients, as a vector, to under
 * 1% of their least-squares length for up to ten terms. */
#define RIDGE_GRID 31
#define RIDGE_GRID_LOW (-6.0)
#define RIDGE_GRID_HIGH 3.0

/* Relative size of a singular value of the standardized columns (or of a
 * reciprocal condition number) below which the columns count as
 * collinear: the same tolerance as linear_fit's rank decision. */
#define RIDGE_RANK_TOL LINEAR_RANK_TOL

/*
 * The problem. For the fitted rows, minimise over b
 *     RSS(b) + lambda * sum_j (s_j b_j)^2
 * where the sum runs over the kept non-intercept terms, s_j is column j's
 * standard deviation over the fitted rows (divisor the number of rows)
 * when the model has an intercept and its root mean square when it has
 * none; the intercept is never penalised. This is gradient_fit's linear
 * cost times 2n, and logistic_fit's penalty (logistic.c, point 3), so
 * `ridge VALUE` means one thing for every solver (Hoerl & Kennard,
 * Technometrics 12 (1970) 55). The centring and s_j come from the fitted
 * rows alone; with ridge_path on a training fold, never from the rows it
 * is validated on.
 *
 * Common arguments:
 *   X, y      n rows (row-major, p columns; column 0 all ones when
 *             intercept) and n targets, extended precision as linear_fit
 *             takes them.
 *   drop      p reasons from linear_fit (LINEAR_KEPT or why not), or NULL
 *             when every term is kept. Terms not kept are skipped and get
 *             NaN. A kept term with no spread in the fitted rows (one value
 *             in all of them with an intercept, all zeros without one: a
 *             rare category missing from a training fold) cannot be told
 *             from the intercept or from nothing there, and the penalty
 *             does not see it: it gets 0, the minimum-norm choice.
 *   lambda    the penalty, 0 or more and finite. 0 is ordinary least
 *             squares on the kept terms.
 *   beta      (output) p coefficients on the original scale of X.
 * Errors are RF_EINPUT (no terms or more than LINEAR_RANK_MAX, no rows, a
 * row index past n, every term dropped, an intercept that is dropped or a
 * column 0 that is not all ones, a non-finite value in a fitted row of a
 * kept term or the target, a negative or non-finite lambda) or RF_ENOMEM.
 */

/* One fit, by Householder QR of the augmented system [Z; sqrt(lambda) I]
 * (Z the standardized, and with an intercept centred, kept columns; see
 * ridge.c). All n rows are fitted. Also RF_EINPUT when the kept terms are
 * collinear in these rows and lambda is too small to separate them
 * (reciprocal condition of the augmented R below RIDGE_RANK_TOL): pass the
 * drops linear_fit made on the same rows. beta is written only on RF_OK.
 * Time O(n p^2), memory O(p^2 + RIDGE_BLOCK p): X is never copied.
 * Accuracy at lambda 0 is that of plain Householder QR on the standardized
 * columns, without linear_fit's extended-precision refinement: NIST StRD
 * Longley to 13.4 digits, Filip (degree 10) to 7.5 (tests/test_ridge.c;
 * Filip measured with a one-off program); a job's `ridge 0` belongs to
 * linear_fit. */
rf_status ridge_fit(const long double *X, const long double *y, size_t n,
                    size_t p, int intercept, const linear_drop *drop,
                    double lambda, double *beta, rf_error *err);

/* The path: the standardized columns of a set of rows factored once (QR,
 * then the SVD of the small R), after which any lambda costs O(p^2). */
typedef struct ridge_path ridge_path;

/* Factors the rows rows[0..n_rows-1] of X and y (indices below n; repeats
 * allowed), or all n rows when rows is NULL (n_rows is then ignored). The
 * path keeps no pointer to X, y, drop or rows. *out is the new path, to be
 * freed with ridge_path_free; NULL on error. Time O(n_rows p^2), memory
 * O(p^2 + RIDGE_BLOCK p). */
rf_status ridge_path_create(const long double *X, const long double *y,
                            size_t n, size_t p, int intercept,
                            const linear_drop *drop, const size_t *rows,
                            size_t n_rows, ridge_path **out, rf_error *err);

/* The fit of the path's rows at lambda into beta (p), as ridge_fit would
 * give it on those rows. At lambda = 0 directions of the standardized
 * columns with singular value below RIDGE_RANK_TOL times the largest are
 * left out: the minimum-norm least-squares solution, the limit of the
 * ridge fit as lambda falls to 0, where ridge_fit refuses collinear
 * columns. Only RF_EINPUT for a bad lambda; beta untouched then. */
rf_status ridge_path_solve(const ridge_path *r, double lambda, double *beta,
                           rf_error *err);

/* The effective degrees of freedom at lambda: the trace of the fit's hat
 * matrix, 1 (the intercept, when there is one) + sum_k d_k^2 / (d_k^2 +
 * lambda), d_k the singular values of the standardized columns (ESL,
 * sec. 3.4.1, eq. 3.50). The number of kept terms with spread at lambda 0,
 * falling towards 1 (0 without an intercept) as lambda grows. NaN for a
 * bad lambda. */
double ridge_path_df(const ridge_path *r, double lambda);

/* Rows the path was made from. */
size_t ridge_path_rows(const ridge_path *r);

void ridge_path_free(ridge_path *r);  /* accepts NULL */

/* Fills grid (RIDGE_GRID values) with the penalties of `ridge auto` for n
 * fitted rows: 0, then n * 10^e for RIDGE_GRID - 1 evenly spaced e from
 * RIDGE_GRID_LOW to RIDGE_GRID_HIGH, increasing. To choose by
 * cross-validation, compare grid positions, not values: fold f's path
 * solves at ridge_grid(rows in fold f's training part)[k], and the final
 * fit on all rows uses ridge_grid(all rows)[k] for the best k, so lambda / n
 * (the penalty per row) is what carries over from the folds. */
void ridge_grid(size_t n, double *grid);

#endif
