/*
 * gradient.h: the `solver gradient` of linear and logistic models: batch
 * gradient descent on standardized inputs, with an optional ridge (L2)
 * penalty, a fixed step and a stated stopping rule. Coefficients come back
 * on the original scale. Not the exact solvers (linear.h, logistic.h), and
 * no standard errors: it reports where it stopped and why.
 */
#ifndef ROWFIT_GRADIENT_H
#define ROWFIT_GRADIENT_H

#include <stddef.h>

#include "../io/error.h"
#include "linear.h"   /* linear_drop */

/* Default epoch cap when the job gives none (`epochs 0`). An epoch is
 * three passes over X (3 n p multiply-adds) plus, for a logistic model,
 * three exp/log1p per row. Measured at 3000 rows (one thread): linear, 12
 * terms, about 0.08 ms an epoch, and the demo converges in under 600
 * epochs; logistic, 7 terms, about 0.27 ms an epoch, converging in 120 to
 * 13000 epochs as the effects grow from moderate to nearly separating. A
 * fit that cannot converge (separation) spends about 14 s there before it
 * says so. */
#define GRADIENT_EPOCHS_DEFAULT 50000L

/* Stopping rule: the fit has converged when one epoch lowers the cost by at
 * most GRADIENT_TOL times the cost. The cost is quadratic in the
 * coefficients' error and gradient descent approaches the minimum slowly,
 * so a 1e-7 relative error in a coefficient shows as a far smaller drop in
 * the cost; the drop is therefore computed directly (from the change of
 * each row's linear predictor, never as the difference of two costs) and
 * stays accurate down to this level. */
#define GRADIENT_TOL 1e-24

/* Power iterations for the largest eigenvalue of Z'Z/n (Golub & Van Loan,
 * Matrix Computations, 4th ed., sec. 7.3.1). The step only needs it within
 * a factor below 2 of the truth; more iterations make the step closer to
 * the best fixed one. */
#define GRADIENT_POWER_ITERS 60

typedef enum gradient_stop {
    GRADIENT_CONVERGED = 0,  /* the cost stopped falling (GRADIENT_TOL) */
    GRADIENT_EPOCHS,         /* the epoch cap was reached first */
    GRADIENT_DIVERGED,       /* the cost rose or overflowed: rate too large */
    GRADIENT_NOTHING         /* every term was dropped; nothing to fit */
} gradient_stop;

typedef struct gradient_model {
    size_t n, p;
    int intercept, logistic;
    double ridge;

    double *beta;        /* p, original scale; NaN where dropped */
    linear_drop *drop;   /* p: LINEAR_KEPT, _ZERO or _CONSTANT (no
                            collinearity check: see gradient_fit) */
    double *center;      /* p: subtracted before scaling (0 when none) */
    double *scale;       /* p: divided by (1 for the intercept, NaN when
                            dropped) */
    double *gamma;       /* p: coefficients on the standardized scale */

    double lipschitz;    /* largest eigenvalue of Z'Z/n, estimated */
    double rate;         /* the step used */
    long epochs;         /* the cap used */
    long iterations;     /* epochs run */
    double cost;         /* final cost: mean squared error / 2 (linear) or
                            mean log loss (logistic), plus the penalty / n */
    double last_drop;    /* relative decrease of the cost in the last epoch */
    int converged;       /* 1 when stop == GRADIENT_CONVERGED */
    gradient_stop stop;
} gradient_model;

/*
 * Fits y (n values; 0 or 1 when logistic) on X (n x p, row-major; column 0
 * all ones when intercept) by batch gradient descent on
 *   cost(g) = (1/n) [ sum_i loss(y_i, z_i'g) + (ridge/2) sum_j g_j^2 ]
 * (the penalty sum over every kept term but the intercept)
 * where z_i is row i standardized: with an intercept each other column is
 * centred at its mean and divided by its standard deviation (over the n
 * rows, divisor n); without one it is only divided by its root mean square,
 * since centring would change the model. loss is (y - eta)^2 / 2 (linear) or
 * the log loss (logistic): so `ridge` means what it means to logistic_fit
 * (log-likelihood less (ridge/2) sum g_j^2) and, for a linear model, the
 * classical ridge regression RSS + ridge sum g_j^2 on standardized inputs
 * (Hoerl & Kennard, Technometrics 12 (1970) 55). A column with one value
 * in every row (with an intercept) or all zeros is dropped as linear_fit
 * drops it. Exactly
 * collinear columns are not detected: descent then ends at the
 * minimum-norm solution on the standardized scale; callers that need the
 * exact solver's drops should pass only the terms linear_fit kept.
 *
 * rate 0 picks the step 1/(L + ridge/n) (linear) or 1/(L/4 + ridge/n)
 * (logistic), L the largest eigenvalue of Z'Z/n: the Lipschitz constant of
 * the gradient, so every epoch lowers the cost (Boyd & Vandenberghe,
 * Convex Optimization, 2004, sec. 9.3). epochs 0 means
 * GRADIENT_EPOCHS_DEFAULT. Not converging is a result (converged = 0 and
 * stop), not an error. Errors (RF_EINPUT): no rows or no terms, non-finite
 * values, a logistic target other than 0/1, a negative or non-finite rate
 * or ridge, negative epochs, an intercept column that is not all ones.
 * *out is the new model (NULL on error). Cost O(epochs * n * p).
 */
rf_status gradient_fit(const long double *X, const double *y, size_t n,
                       size_t p, int intercept, int logistic, double ridge,
                       double rate, long epochs, gradient_model **out,
                       rf_error *err);
void gradient_free(gradient_model *m);  /* accepts NULL */

/* The estimate for a row x (p values): x'beta, or its probability for a
 * logistic model. Dropped terms count as 0. */
double gradient_predict(const gradient_model *m, const long double *x);

/* Why it stopped, as a short phrase for Summary ("converged: ..."). */
const char *gradient_stop_str(gradient_stop s);

#endif
