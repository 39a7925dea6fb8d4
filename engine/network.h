/*
 * network.h: the `model network`: a small multilayer perceptron (tanh
 * hidden units; a linear output for numbers, a logistic output with
 * cross-entropy for yes/no targets) trained by backpropagation with
 * full-batch L-BFGS or mini-batch Adam, early stopping on held-out rows,
 * restarts, and permutation importance of the inputs. Not a general
 * deep-learning library: no other activations, no dropout, no GPU; no
 * standard errors or intervals.
 */
#ifndef ROWFIT_NETWORK_H
#define ROWFIT_NETWORK_H

#include <stddef.h>
#include <stdint.h>

#include "../io/error.h"

/* Limits, each with its reason (job.h checks the same numbers when it reads
 * `hidden`; network.c asserts they agree). */
#define NETWORK_HIDDEN_MAX 4      /* hidden layers: a table of office size
                                     needs one or two (common practice) */
#define NETWORK_UNITS_MAX 1000    /* units a hidden layer; also sizes the
                                     stack buffers of network_predict */
#define NETWORK_HIDDEN_DEFAULT 8  /* one hidden layer of 8 (contract sec. 2) */

/* Solver choice by size: full-batch L-BFGS when the training rows times the
 * weights is at most NETWORK_LBFGS_BUDGET (one pass of the data then costs
 * about 6 x 2^24 floating-point operations, some milliseconds, so a
 * thousand quasi-Newton iterations stay within seconds), else mini-batch
 * Adam, whose cost per update does not grow with the rows. Example: the
 * default network on 20 inputs has 177 weights, so L-BFGS up to 94,786
 * rows; 16 units on 20 inputs (353 weights), up to 47,527 rows. */
#define NETWORK_LBFGS_BUDGET (1UL << 24)

#define NETWORK_LBFGS_EPOCHS 1000 /* default iteration cap of L-BFGS */
#define NETWORK_ADAM_EPOCHS 200   /* default epoch cap of Adam */
#define NETWORK_ADAM_RATE 0.001   /* Adam's default step (Kingma & Ba 2015,
                                     Algorithm 1) */
/* Adam's mini-batch: NETWORK_BATCH rows (Kingma & Ba 2015, sec. 6, use
 * 128), doubled while an epoch still makes NETWORK_BATCH_STEPS updates or
 * more, up to NETWORK_BATCH_MAX (network_batch): on large data a batch of
 * 1024 rows gives two threads a block of 512 rows each, and fifty updates
 * an epoch, ten thousand in the default 200 epochs, are still many. */
#define NETWORK_BATCH 128
#define NETWORK_BATCH_MAX 1024
#define NETWORK_BATCH_STEPS 50
#define NETWORK_LBFGS_MEMORY 10   /* pairs kept; 3 to 20 is usual (Nocedal &
                                     Wright, 2nd ed., sec. 7.2) */
/* Early stopping: the run stops when the held-out loss has not fallen
 * below (1 - NETWORK_MIN_GAIN) times its best for this many epochs
 * (Adam) or iterations (L-BFGS, whose iterations are smaller steps). */
#define NETWORK_PATIENCE_ADAM 10
#define NETWORK_PATIENCE_LBFGS 50
#define NETWORK_MIN_GAIN 1e-4
/* Threads: every pass over the rows (a full pass or one of Adam's
 * batches) is cut into lanes of consecutive rows, as many as the rows
 * allow at NETWORK_LANE_ROWS a lane and at most NETWORK_LANES; each lane
 * sums its own loss and gradient, and the lanes' sums are added in lane
 * order. The cut depends on the rows alone, so one thread or several give
 * the same bits; the threads (network_options.threads) share the lanes. */
#define NETWORK_LANES 4           /* the most threads a fit can use: a
                                     laptop's cores; each lane keeps its
                                     own copy of the weights and gradient */
#define NETWORK_LANE_ROWS 512     /* rows a lane, rounded: a lane is then a
                                     whole block of a pass, the size at
                                     which its products run near their rate
                                     (tests/bench_net.c) */
#define NETWORK_HOLDOUT 0.1       /* default share of rows held out */
#define NETWORK_PERMUTATIONS 5    /* shuffles averaged per input group */

typedef enum network_solver {
    NETWORK_SOLVER_AUTO = 0,  /* by NETWORK_LBFGS_BUDGET */
    NETWORK_LBFGS,
    NETWORK_ADAM
} network_solver;

typedef enum network_stop {
    NETWORK_CONVERGED = 0,  /* L-BFGS: the objective stopped falling */
    NETWORK_EARLY_STOP,     /* the held-out loss stopped falling */
    NETWORK_EPOCHS          /* the epoch cap was reached first */
} network_stop;

/* Called after every epoch (Adam) or iteration (L-BFGS) of every restart,
 * with the mean training loss (Adam: averaged over the epoch's batches
 * as they went) and the held-out loss (NaN without held-out rows), both as
 * in network_model. For a progress line; must not fail. */
typedef void (*network_progress)(void *ctx, long epoch, double train_loss,
                                 double valid_loss);

typedef struct network_options {
    size_t n_hidden;                    /* 1 .. NETWORK_HIDDEN_MAX */
    size_t hidden[NETWORK_HIDDEN_MAX];  /* units, 1 .. NETWORK_UNITS_MAX */
    int classify;           /* 1: y is 0/1, logistic output, log loss */
    network_solver solver;
    double ridge;           /* L2 penalty (ridge/2) sum W^2 on the weights,
                               not the biases, against the summed loss */
    double rate;            /* 0: default. Adam: the step alpha; L-BFGS:
                               the largest first trial step (default 1,
                               the quasi-Newton step) */
    long epochs;            /* 0: the solver's default cap */
    unsigned long seed;     /* held-out rows, start weights, shuffles */
    size_t restarts;        /* fits from this many starts, >= 1 */
    double holdout;         /* share of rows held out, [0, 0.5]; 0: none
                               (no early stopping, no importance rows) */
    size_t threads;         /* 0: the processors the process may use;
                               no more than the lanes are used either
                               way. The weights do not depend on it. */
    network_progress progress;  /* may be NULL */
    void *progress_ctx;
} network_options;

typedef struct network_model {
    size_t p;               /* design columns it takes (x as given) */
    size_t n;               /* rows it was fitted on (held-out included) */
    size_t n_layers;        /* hidden layers + 1 */
    size_t *units;          /* n_layers + 1: units[0] inputs used, ...,
                               units[n_layers] = 1 */
    double **W, **b;        /* W[l]: units[l+1] x units[l], row-major;
                               b[l]: units[l+1]; both point into theta */
    double *theta;          /* every weight, layer by layer, W[l] then b[l]
                               (the layout of network_loss_grad) */
    size_t n_weights;       /* entries of theta, biases included */
    size_t *col;            /* units[0]: design column of each input unit
                               (constant columns, the intercept among them,
                               carry nothing and are skipped) */
    double *in_mean, *in_scale;  /* units[0]: over the training rows */
    double y_mean, y_scale; /* numeric target's standardization (0 and 1
                               for yes/no; y_scale 1 when y is constant) */
    int classify;
    network_solver solver;  /* the solver used (never AUTO) */
    network_stop stop;      /* why the kept restart stopped */
    long epochs;            /* epochs or iterations the kept restart ran */
    long epochs_cap;        /* the cap used */
    size_t batch;           /* Adam's batch rows; 0 for L-BFGS */
    double rate;            /* the rate used */
    double ridge;
    double train_loss;      /* mean loss on the training rows at the kept
                               weights, no penalty: mean squared error on
                               the target's scale, or mean log loss */
    double valid_loss;      /* the same on the held-out rows; NaN if none */
    size_t restarts;
    size_t restart_best;    /* index of the kept restart */
    double *restart_loss;   /* restarts: each restart's held-out loss (its
                               training loss when nothing is held out) */
    size_t *holdout, n_holdout;  /* held-out rows, ascending indices into
                                    the n fitted rows */
} network_model;

/* Fills o with the defaults: one hidden layer of NETWORK_HIDDEN_DEFAULT,
 * numeric target, solver by size, no ridge, default rate and epochs, seed
 * 1, one restart, NETWORK_HOLDOUT held out, no progress callback. */
void network_options_init(network_options *o);

/*
 * Fits the network to y (n values; 0 or 1 when o->classify) on X (n x p,
 * row-major, as design.h builds it). A share o->holdout of the rows,
 * drawn with the seed, is held out; the inputs (and a numeric target) are
 * standardized on the other rows, the training rows (mean, standard
 * deviation with divisor n), and a column constant on them is skipped. Each
 * restart r starts from Glorot-uniform weights (Glorot & Bengio, AISTATS
 * 2010, eq. 16) and zero biases, drawn with GSL's mt19937 from a seed mixed
 * from o->seed and r, and minimises
 *   (1/n_train) [ sum_i loss_i + (ridge/2) sum W^2 ]
 * (loss_i = (t_i - out_i)^2 / 2 on the standardized target, or the log
 * loss) by L-BFGS or Adam (network.c cites both), stopping at the cap, at
 * convergence or early (patience above); it keeps the weights with the
 * lowest held-out loss seen. The restart with the lowest held-out loss is
 * kept. The same inputs give the same weights bit for bit on one machine,
 * with any o->threads. The passes run on a team of threads (team.h) that
 * lives for the call; meanwhile OpenBLAS is set to one thread of its own
 * (process-wide; restored on return), so no other thread of the process
 * should call the BLAS during a fit.
 *
 * Errors (RF_EINPUT): bad options (no hidden layer, a layer of 0 or more
 * than NETWORK_UNITS_MAX units, restarts 0, negative or non-finite ridge,
 * rate or epochs, holdout outside [0, 0.5]), too few rows (two training
 * rows and, with a holdout, one held-out row), non-finite inputs or target,
 * a yes/no target other than 0/1, sizes past what the solver can index,
 * and a training loss that becomes non-finite (the rate is too large).
 * RF_ENOMEM. *out is the new model (caller frees with network_free), NULL
 * on error. Workspace O(n units[0] + lanes x block x units + (memory +
 * lanes) x weights), and Adam's O(n) for its batches.
 */
rf_status network_fit(const long double *X, const double *y, size_t n,
                      size_t p, const network_options *o,
                      network_model **out, rf_error *err);

void network_free(network_model *m);  /* accepts NULL */

/* The estimate for a row x (p values): the target's value, or the
 * probability of the positive class. No allocation. */
double network_predict(const network_model *m, const long double *x);

/* Adam's batch rows for n_train training rows (NETWORK_BATCH above). */
size_t network_batch(size_t n_train);

/* Weights and biases to fit: callers warn when the rows are few beside it. */
size_t network_weights(const network_model *m);

/*
 * Permutation importance (Breiman, Machine Learning 45 (2001) 5, sec. 10)
 * per input group: out[g] is the increase of the mean loss (as valid_loss)
 * over the held-out rows when the values of group g's design columns
 * group_first[g] .. group_first[g] + group_len[g] - 1 are shuffled among
 * those rows together (a category's indicators move as one), averaged over
 * NETWORK_PERMUTATIONS shuffles drawn with seed. X and y are the n rows
 * given to network_fit; with no held-out rows, all n rows are used. A group
 * of skipped columns gets 0. Errors: RF_EINPUT (n differs from the fit, a
 * group outside the p columns), RF_ENOMEM. out: n_groups, caller's.
 */
rf_status network_importance(const network_model *m, const long double *X,
                             const double *y, size_t n,
                             const size_t *group_first,
                             const size_t *group_len, size_t n_groups,
                             unsigned long seed, double *out, rf_error *err);

const char *network_stop_str(network_stop s);      /* for Summary */
const char *network_solver_str(network_solver s);  /* "lbfgs", "adam" */

/* ---- For tests and the solvers: the objective and its gradient. ---- */

/* Workspace of network_loss_grad for a network of n_layers layers with
 * units[0..n_layers] units (units[n_layers] = 1, the one output unit),
 * over blocks of up to rows rows, for up to NETWORK_LANES lanes. NULL on
 * no memory or another output width. */
typedef struct network_work network_work;
network_work *network_work_alloc(size_t n_layers, const size_t *units,
                                 size_t rows);
void network_work_free(network_work *w);  /* accepts NULL */

/*
 * The objective at theta (layout of network_model.theta) over n rows of
 * standardized inputs Z (n x units[0], row-major) and targets t (n):
 *   (1/n) sum_i loss_i + (lambda/2) sum W^2     (biases not penalized)
 * with loss_i = (t_i - out_i)^2 / 2, or log(1 + e^z_i) - t_i z_i for
 * classify (z_i the output unit's input, out_i = 1/(1 + e^-z_i)). When
 * grad is not NULL it receives the gradient (n_weights values) by
 * backpropagation (Rumelhart, Hinton & Williams, Nature 323 (1986) 533),
 * the products by cblas_dgemm on blocks of w's rows, the rows cut into
 * lanes as network.h says (on the calling thread). When mean_loss is not
 * NULL it receives (1/n) sum_i loss_i alone. n >= 1.
 */
double network_loss_grad(size_t n_layers, const size_t *units, int classify,
                         const double *theta, const double *Z,
                         const double *t, size_t n, double lambda,
                         double *grad, double *mean_loss, network_work *w);

/* The same over rows idx[0 .. n-1] of Z and t, in that order, as Adam's
 * batches read them (gathered as the pass goes, not copied first): the
 * same bits as network_loss_grad over those rows copied in that order.
 * Every idx[i] must be a row of Z. */
double network_loss_grad_rows(size_t n_layers, const size_t *units,
                              int classify, const double *theta,
                              const double *Z, const double *t,
                              const uint32_t *idx, size_t n, double lambda,
                              double *grad, double *mean_loss,
                              network_work *w);

#endif
