/*
 * fit.c: the job's model fitted to its design (see fit.h).
 *
 * Order, and why: the exact fit first, because it decides the rank (and,
 * for solver gradient, is what the descent is checked against); ridge
 * auto's choice next, by cross-validation; then the reported
 * cross-validation, before a penalty or the descent replaces the least
 * squares coefficients whose factor the linear update uses; then the
 * penalised fit, the descent, the classification measures and the
 * diagnostics of the final coefficients.
 */
#include "fit.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "ridge.h"

/* A condition number past which the Summary's accurate-digits estimate
 * falls below 10, worth a warning (common practice: 1e8). */
#define COND_WARN 1e8

/* An error at the job's model line, unless the error has a place. */
static rf_status at_model(const job *j, rf_status st, rf_error *err)
{
    if (st != RF_OK && err->where[0] == '\0')
        snprintf(err->where, sizeof err->where, "%s:%d", j->file,
                 j->model_line);
    return st;
}

/* Everything a fit produces, owned here. */
struct fit {
    linear_model *lin;
    logistic_model *logit;
    gradient_model *grad;
    double *y;               /* logistic: the 0/1 target as doubles */
    classify_measures cm;
    fit_result rm;
    /* cross-validation */
    fit_cv cv;
    size_t *fold;
    double *cv_pred;
    validate_result *cv_res;
    validate_calibration *cv_cal;
    double *path_grid, *path_mean, *path_se;   /* ridge auto */
    diagnose_result *diag;
    double *vif;
    size_t *fold_id;
    /* model network */
    network_model *net;
    network_options net_opt;
    double *fitted;          /* per fitted row: estimate or probability */
    double *importance;      /* per design input */
};

void fit_free(fit *f)
{
    if (f == NULL)
        return;
    linear_free(f->lin);
    logistic_free(f->logit);
    gradient_free(f->grad);
    free(f->y);
    free(f->fold);
    free(f->cv_pred);
    validate_free(f->cv_res);
    validate_calibration_free(f->cv_cal);
    free(f->path_grid);
    free(f->path_mean);
    free(f->path_se);
    diagnose_free(f->diag);
    free(f->vif);
    free(f->fold_id);
    network_free(f->net);
    free(f->fitted);
    free(f->importance);
    free(f);
}

/* Folds for the job: `folds K`, or by default 5 when there are at least
 * CV_DEFAULT_MIN_ROWS fitted rows (contract), none below. */
#define CV_DEFAULT_FOLDS 5
#define CV_DEFAULT_MIN_ROWS 50

static size_t job_folds(const job *j, size_t n)
{
    if (j->folds >= 0)
        return (size_t)j->folds;
    return n >= CV_DEFAULT_MIN_ROWS ? CV_DEFAULT_FOLDS : 0;
}

/* A training set and the rows to estimate from it (indices of fitted
 * rows). */
typedef struct fold_set {
    const size_t *train, *test;
    size_t nt, ntest;
} fold_set;

/* The training rows of a fold, copied out (the fits take contiguous rows):
 * *Xt (nt x p) and *yt (nt), caller frees both, also on error. */
static rf_status train_copy(const design *d, const fit *f, const fold_set *fs,
                            long double **Xt, double **yt, rf_error *err)
{
    size_t p = d->p;
    *Xt = malloc((fs->nt ? fs->nt : 1) * p * sizeof **Xt);
    *yt = malloc((fs->nt ? fs->nt : 1) * sizeof **yt);
    if (*Xt == NULL || *yt == NULL)
        return error_nomem(err, NULL);
    for (size_t t = 0; t < fs->nt; t++) {
        memcpy(*Xt + t * p, d->X + fs->train[t] * p, p * sizeof **Xt);
        (*yt)[t] = f->y[fs->train[t]];
    }
    return RF_OK;
}

/* A network's fold: its training rows trained as the full fit is (same
 * options, so its own held-out slice and standardizing come from those
 * rows), the test rows estimated. A training loss that turns non-finite
 * fails the fold. */
static rf_status fold_fit_network(const design *d, const fit *f,
                                  const fold_set *fs, double *pred,
                                  size_t *failed, rf_error *err)
{
    size_t p = d->p;
    long double *Xt = NULL;
    double *yt = NULL;
    network_model *m = NULL;
    rf_status st = train_copy(d, f, fs, &Xt, &yt, err);
    if (st)
        goto out;
    /* the same penalty per row as the full fit (its objective divides the
     * penalty by the training rows) */
    network_options o = f->net_opt;
    o.ridge = f->net_opt.ridge * (double)fs->nt / (double)d->n_fit;
    rf_error e2;
    memset(&e2, 0, sizeof e2);
    st = network_fit(Xt, yt, fs->nt, p, &o, &m, &e2);
    if (st == RF_ENOMEM || st == RF_ESYSTEM) {
        *err = e2;
        goto out;
    }
    *failed = st != RF_OK;
    for (size_t t = 0; t < fs->ntest; t++)
        pred[t] = st == RF_OK ? network_predict(m, d->X + fs->test[t] * p)
                              : NAN;
    st = RF_OK;
out:
    network_free(m);
    free(Xt);
    free(yt);
    return st;
}

/* Fits the training rows at each of G penalties and fills pred (G x
 * ntest, penalty-major) with the test rows' estimates or probabilities,
 * NaN where a fit failed (a logistic fold that separates without a
 * penalty, or does not converge). Every scale a fit uses (the centring and
 * standardizing of the penalty, the rank decisions of a logistic fit) is
 * its training rows' own. *failed counts the penalties that failed. */
static rf_status fold_fit(const job *j, const design *d, const fit *f,
                          const fold_set *fs, const double *lambda, size_t G,
                          double *pred, size_t *failed, rf_error *err)
{
    size_t p = d->p;
    rf_status st = RF_OK;
    double *beta = malloc(p * sizeof *beta);
    long double *Xt = NULL;
    double *yt = NULL;
    *failed = 0;
    if (beta == NULL)
        return error_nomem(err, NULL);
    if (j->model == MODEL_NETWORK) {
        free(beta);
        return fold_fit_network(d, f, fs, pred, failed, err);
    }
    if (j->model != MODEL_LOGISTIC) {
        ridge_path *path = NULL;
        rf_error e2;
        memset(&e2, 0, sizeof e2);
        st = ridge_path_create(d->X, d->y, d->n_fit, p, d->intercept,
                               f->lin->drop, fs->train, fs->nt, &path, &e2);
        for (size_t g = 0; g < G; g++) {
            int ok = st == RF_OK
                     && ridge_path_solve(path, lambda[g], beta, &e2) == RF_OK;
            *failed += !ok;
            for (size_t t = 0; t < fs->ntest; t++) {
                const long double *x = d->X + fs->test[t] * p;
                long double e = 0;
                for (size_t c = 0; ok && c < p; c++)
                    if (f->lin->drop[c] == LINEAR_KEPT)
                        e += x[c] * beta[c];
                pred[g * fs->ntest + t] = ok ? (double)e : NAN;
            }
        }
        ridge_path_free(path);
        if (st == RF_ENOMEM || st == RF_ESYSTEM)
            *err = e2;
        else
            st = RF_OK;   /* a fold that cannot be fitted is a result */
        free(beta);
        return st;
    }
    if ((st = train_copy(d, f, fs, &Xt, &yt, err)))
        goto out;
    for (size_t g = 0; g < G; g++) {
        logistic_model *m = NULL;
        rf_error e2;
        memset(&e2, 0, sizeof e2);
        st = logistic_fit(Xt, yt, fs->nt, p, d->intercept, j->level,
                          lambda[g], &m, &e2);
        if (st == RF_ENOMEM || st == RF_ESYSTEM) {
            *err = e2;
            goto out;
        }
        int ok = st == RF_OK && m->converged
                 && (m->separation == SEPARATION_NONE || lambda[g] > 0);
        st = RF_OK;
        *failed += !ok;
        for (size_t t = 0; t < fs->ntest; t++)
            pred[g * fs->ntest + t] =
                ok ? logistic_predict(m, d->X + fs->test[t] * p) : NAN;
        logistic_free(m);
    }
out:
    free(beta);
    free(Xt);
    free(yt);
    return st;
}

/* The error of one fold's estimates, for choosing a penalty: the mean
 * squared error (linear) or the mean log loss, probabilities clipped as
 * classify.h clips them (yes/no). NaN when any estimate is missing. */
static double fold_error(const double *y, const size_t *test, size_t ntest,
                         const double *pred, int classify)
{
    long double s = 0;
    for (size_t t = 0; t < ntest; t++) {
        double q = pred[t], yi = y[test[t]];
        if (!isfinite(q))
            return NAN;
        if (classify) {
            double own = yi ? q : 1 - q;
            if (own < CLASSIFY_CLIP)
                own = CLASSIFY_CLIP;
            s -= logl(own);
        } else {
            s += (long double)(yi - q) * (yi - q);
        }
    }
    return ntest ? (double)(s / ntest) : NAN;
}

/* The training and test rows of fold fo among the rows `rows` (nr of
 * them; fold[] parallel to rows) into train and test (caller's, nr each). */
static void fold_split(const size_t *rows, const size_t *fold, size_t nr,
                       size_t fo, size_t *train, size_t *test, fold_set *fs)
{
    fs->nt = fs->ntest = 0;
    for (size_t i = 0; i < nr; i++) {
        if (fold[i] == fo)
            test[fs->ntest++] = rows[i];
        else
            train[fs->nt++] = rows[i];
    }
    fs->train = train;
    fs->test = test;
}

/* ridge auto: the grid position chosen on the fitted rows `rows` (nr of
 * them) by k-fold cross-validation within them, folds from seed: each
 * penalty of ridge_grid(nr) at the same penalty per row in every training
 * fold, the error of each fold, the choice of validate_choose. mean and
 * se (RIDGE_GRID each) get the path, or may be
 * NULL. Only the rows given are ever read, so the choice made for an
 * outer fold never sees that fold. k is capped at nr (an outer fold's
 * training rows can be fewer than the folds asked for). */
static rf_status choose_ridge(const job *j, const design *d, const fit *f,
                              const size_t *rows, size_t nr, size_t k,
                              unsigned long seed, double *mean, double *se,
                              size_t *best, size_t *chosen, rf_error *err)
{
    int classify = d->binary;
    if (k > nr)
        k = nr;
    const double *y = classify ? f->y : NULL;
    double pen[RIDGE_GRID], lam[RIDGE_GRID], gm[RIDGE_GRID], gs[RIDGE_GRID];
    size_t G = RIDGE_GRID, failed;
    size_t *fold = malloc(nr * sizeof *fold), *train = malloc(nr * sizeof *train);
    size_t *test = malloc(nr * sizeof *test);
    double *cls = classify ? malloc(nr * sizeof *cls) : NULL;
    double *yy = classify ? NULL : malloc(d->n_fit * sizeof *yy);
    double *pred = malloc(G * nr * sizeof *pred);
    double *errs = malloc(G * k * sizeof *errs);
    rf_status st = RF_OK;
    if (!fold || !train || !test || (classify ? !cls : !yy) || !pred
        || !errs) {
        st = error_nomem(err, NULL);
        goto out;
    }
    if (classify)
        for (size_t i = 0; i < nr; i++)
            cls[i] = f->y[rows[i]];
    else
        for (size_t i = 0; i < d->n_fit; i++)
            yy[i] = (double)d->y[i];
    if ((st = validate_folds(nr, k, seed, cls, fold, err)))
        goto out;
    ridge_grid(nr, pen);
    for (size_t fo = 0; fo < k; fo++) {
        fold_set fs;
        fold_split(rows, fold, nr, fo, train, test, &fs);
        for (size_t g = 0; g < G; g++)
            lam[g] = pen[g] * (double)fs.nt / (double)nr;
        if ((st = fold_fit(j, d, f, &fs, lam, G, pred, &failed, err)))
            goto out;
        for (size_t g = 0; g < G; g++)
            errs[g * k + fo] = fold_error(classify ? y : yy, fs.test,
                                          fs.ntest, pred + g * fs.ntest,
                                          classify);
    }
    *chosen = validate_choose(errs, G, k, mean ? mean : gm, se ? se : gs,
                              best);
    if (*chosen == G) {
        char where[ERROR_WHERE_MAX];
        snprintf(where, sizeof where, "%s:%d", j->file, j->ridge_line);
        st = error_set(err, RF_EINPUT, where, "ridge auto: no penalty of "
                       "the grid could be fitted in every fold");
    }
out:
    free(fold);
    free(train);
    free(test);
    free(cls);
    free(yy);
    free(pred);
    free(errs);
    return st;
}

/* The measures of the rows that have an out-of-fold value, their folds
 * renumbered without the failed ones; none when fewer than two folds are
 * left. */
static rf_status cv_measure(const job *j, const design *d, fit *f,
                            int classify, rf_error *err)
{
    size_t n = d->n_fit, k = f->cv.k, m = 0, km = 0;
    size_t *map = malloc(k * sizeof *map), *fo = malloc(n * sizeof *fo);
    double *yy = malloc(n * sizeof *yy), *pp = malloc(n * sizeof *pp);
    rf_status st = RF_OK;
    if (map == NULL || fo == NULL || yy == NULL || pp == NULL) {
        st = error_nomem(err, NULL);
        goto out;
    }
    /* the folds with a value, renumbered in order; fold_id keeps their
     * own numbers for the Validation sheet */
    for (size_t c = 0; c < k; c++)
        map[c] = (size_t)-1;
    for (size_t i = 0; i < n; i++)
        if (isfinite(f->cv_pred[i]))
            map[f->fold[i]] = 0;
    if ((f->fold_id = malloc(k * sizeof *f->fold_id)) == NULL) {
        st = error_nomem(err, NULL);
        goto out;
    }
    for (size_t c = 0; c < k; c++)
        if (map[c] == 0) {
            f->fold_id[km] = c;
            map[c] = km++;
        }
    for (size_t i = 0; i < n; i++) {
        if (!isfinite(f->cv_pred[i]))
            continue;
        fo[m] = map[f->fold[i]];
        yy[m] = (double)d->y[i];
        pp[m++] = f->cv_pred[i];
    }
    if (km >= 2) {
        st = validate_measure(yy, pp, fo, m, km, classify, j->threshold,
                              &f->cv_res, err);
        if (st == RF_OK && classify)
            st = validate_calibrate(yy, pp, m, CLASSIFY_HL_GROUPS,
                                    &f->cv_cal, err);
        if (st)
            st = at_model(j, st, err);
    }
out:
    free(map);
    free(fo);
    free(yy);
    free(pp);
    return st;
}

/* Folds for cross-validation and for ridge auto's choice: `folds K`, the
 * default, or for ridge auto on fewer rows than the default needs, 5. */
static rf_status cv_folds(const job *j, size_t n, size_t *k, rf_error *err)
{
    char where[ERROR_WHERE_MAX];
    *k = job_folds(j, n);
    if (j->ridge_auto && *k == 0) {
        snprintf(where, sizeof where, "%s:%d", j->file, j->ridge_line);
        if (j->folds == 0)
            return error_set(err, RF_EINPUT, where, "ridge auto chooses the "
                             "penalty by cross-validation, which `folds 0` "
                             "turns off: remove that line or give a penalty");
        *k = CV_DEFAULT_FOLDS;
    }
    if (*k > n) {
        snprintf(where, sizeof where, "%s:%d", j->file,
                 j->folds_line ? j->folds_line : j->ridge_line);
        return error_set(err, RF_EINPUT, where, "folds %zu needs at least "
                         "%zu fitted rows; there are %zu", *k, *k, n);
    }
    return RF_OK;
}

/* ridge auto over every fitted row: the penalty the fit uses, with the
 * whole path for the Validation sheet. */
static rf_status ridge_auto(const job *j, const design *d, fit *f,
                            rf_error *err)
{
    size_t n = d->n_fit, k;
    rf_status st = cv_folds(j, n, &k, err);
    if (st)
        return st;
    size_t *rows = malloc(n * sizeof *rows);
    f->path_grid = malloc(RIDGE_GRID * sizeof *f->path_grid);
    f->path_mean = malloc(RIDGE_GRID * sizeof *f->path_mean);
    f->path_se = malloc(RIDGE_GRID * sizeof *f->path_se);
    if (!rows || !f->path_grid || !f->path_mean || !f->path_se) {
        free(rows);
        return error_nomem(err, NULL);
    }
    for (size_t i = 0; i < n; i++)
        rows[i] = i;
    st = choose_ridge(j, d, f, rows, n, k, j->seed, f->path_mean,
                      f->path_se, &f->cv.best, &f->cv.chosen, err);
    free(rows);
    if (st)
        return at_model(j, st, err);
    ridge_grid(n, f->path_grid);
    f->cv.G = RIDGE_GRID;
    f->cv.grid = f->path_grid;
    f->cv.mean = f->path_mean;
    f->cv.se = f->path_se;
    f->rm.ridge = f->path_grid[f->cv.chosen];
    return RF_OK;
}

/* k-fold cross-validation of the fitted model, by the exact solver of the
 * same problem (solver gradient's coefficients come later). Linear without
 * a penalty: one QR, updated per fold (linear_cv). Otherwise each fold's
 * training rows are fitted at the same penalty per row; with ridge auto
 * the penalty itself is chosen again inside each training fold (nested),
 * so the held-out rows never inform it. */
static rf_status cross_validate(const job *j, const design *d, fit *f,
                                rf_warnings *warn, rf_error *err)
{
    size_t n = d->n_fit, k;
    rf_status st = cv_folds(j, n, &k, err);
    if (st || k == 0)
        return st;
    int classify = d->binary;
    f->cv.k = k;
    f->cv.seed = j->seed;
    f->cv.stratified = classify;
    f->fold = malloc(n * sizeof *f->fold);
    f->cv_pred = malloc(n * sizeof *f->cv_pred);
    size_t *all = malloc(n * sizeof *all), *train = malloc(n * sizeof *train);
    size_t *test = malloc(n * sizeof *test);
    if (!f->fold || !f->cv_pred || !all || !train || !test) {
        st = error_nomem(err, NULL);
        goto out;
    }
    if ((st = validate_folds(n, k, j->seed, classify ? f->y : NULL, f->fold,
                             err))) {
        st = at_model(j, st, err);
        goto out;
    }
    if (j->model == MODEL_LINEAR && f->rm.ridge == 0 && !j->ridge_auto) {
        f->cv.method = "each fold's estimates updated from the full fit's "
                       "QR factor (exact, the same as refitting)";
        st = linear_cv(f->lin, d->X, d->y, f->fold, k, f->cv_pred,
                       &f->cv.refits, err);
        st = at_model(j, st, err);
        goto measure;
    }
    f->cv.method = j->ridge_auto
        ? "each fold's penalty chosen again by cross-validation within its "
          "training rows, then its training rows refitted at it"
        : j->model == MODEL_NETWORK
        ? "each fold's training rows trained as the full network is (its "
          "own held-out slice, standardizing and start weights)"
        : classify ? "each fold's training rows refitted by Newton's method "
                     "(IRLS)"
                   : "each fold's training rows refitted (ridge, exact)";
    for (size_t i = 0; i < n; i++)
        all[i] = i;
    for (size_t fo = 0; fo < k; fo++) {
        fold_set fs;
        fold_split(all, f->fold, n, fo, train, test, &fs);
        /* the same penalty per row as the full fit */
        double lam = f->rm.ridge * (double)fs.nt / (double)n;
        if (j->ridge_auto) {
            size_t best, chosen;
            double pen[RIDGE_GRID];
            /* the nested choice within the training rows: at most
             * CV_DEFAULT_FOLDS inner folds, so leave-one-out outside does
             * not square its cost inside */
            size_t inner = k < CV_DEFAULT_FOLDS ? k : CV_DEFAULT_FOLDS;
            if ((st = choose_ridge(j, d, f, fs.train, fs.nt, inner,
                                   j->seed + fo + 1, NULL, NULL, &best,
                                   &chosen, err))) {
                st = at_model(j, st, err);
                goto out;
            }
            ridge_grid(fs.nt, pen);
            lam = pen[chosen];
        }
        double *pred = malloc((fs.ntest ? fs.ntest : 1) * sizeof *pred);
        size_t failed = 0;
        if (pred == NULL) {
            st = error_nomem(err, NULL);
            goto out;
        }
        st = fold_fit(j, d, f, &fs, &lam, 1, pred, &failed, err);
        for (size_t t = 0; st == RF_OK && t < fs.ntest; t++)
            f->cv_pred[fs.test[t]] = pred[t];
        free(pred);
        if (st)
            goto out;
        f->cv.failed += failed;
    }
measure:
    if (st)
        goto out;
    if (f->cv.failed
        && (st = error_warn(warn, NULL, "cross-validation: %zu of %zu "
                            "folds could not be fitted (the classes are "
                            "separated within their training rows, or the "
                            "fit did not converge); their rows have no cv "
                            "value and are left out of the cv measures. A "
                            "`ridge` penalty helps",
                            f->cv.failed, k)))
        goto out;
    if ((st = cv_measure(j, d, f, classify, err)))
        goto out;
    f->cv.pred = f->cv_pred;
    f->cv.fold_id = f->fold_id;
    f->cv.res = f->cv_res;
    f->cv.cal = f->cv_cal;
    f->rm.cv = &f->cv;
out:
    free(all);
    free(train);
    free(test);
    return st;
}

/* Significant digits two coefficient vectors share, the worst kept term:
 * -log10(|a - b| / |b|), at most 16. */
static double agree_digits(const double *a, const double *b,
                           const linear_drop *drop, size_t p)
{
    double worst = 16;
    for (size_t k = 0; k < p; k++) {
        if (drop[k] != LINEAR_KEPT)
            continue;
        double rel = b[k] != 0 ? fabs(a[k] - b[k]) / fabs(b[k])
                               : fabs(a[k]);
        double dg = rel > 0 ? -log10(rel) : 16;
        if (!(dg >= worst))   /* NaN counts as no agreement */
            worst = isnan(dg) ? 0 : dg;
    }
    return worst < 0 ? 0 : worst;
}

/* solver gradient: descends on the terms the exact fit kept (it decides
 * the rank; descent cannot), then puts its coefficients into the exact
 * model, which recomputes every measure from them. The exact coefficients
 * are kept long enough to say how closely the two agree. */
static rf_status fit_gradient(const job *j, const design *d, fit *f,
                              const linear_drop *drop, rf_error *err)
{
    size_t n = d->n_fit, p = d->p, pk = 0;
    int logistic = f->logit != NULL;
    for (size_t k = 0; k < p; k++)
        pk += drop[k] == LINEAR_KEPT;
    long double *Xk = malloc((n * pk > 0 ? n * pk : 1) * sizeof *Xk);
    double *yk = malloc((n ? n : 1) * sizeof *yk);
    double *beta = malloc(p * sizeof *beta);
    double *exact = malloc(p * sizeof *exact);
    rf_status st = RF_OK;
    if (Xk == NULL || yk == NULL || beta == NULL || exact == NULL) {
        st = error_nomem(err, NULL);
        goto out;
    }
    for (size_t i = 0; i < n; i++) {
        for (size_t k = 0, c = 0; k < p; k++)
            if (drop[k] == LINEAR_KEPT)
                Xk[i * pk + c++] = d->X[i * p + k];
        yk[i] = (double)d->y[i];
    }
    int icpt = d->intercept && drop[0] == LINEAR_KEPT;
    st = gradient_fit(Xk, yk, n, pk, icpt, logistic, f->rm.ridge, j->rate,
                      j->epochs, &f->grad, err);
    if (st) {
        st = at_model(j, st, err);
        goto out;
    }
    const gradient_model *g = f->grad;
    if (!g->converged) {
        char where[ERROR_WHERE_MAX];
        snprintf(where, sizeof where, "%s:%d", j->file,
                 j->epochs_line ? j->epochs_line : j->solver_line);
        st = error_set(err, RF_EINPUT, where,
                       "solver gradient did not converge: %s after %ld "
                       "epoch%s (cost %.6g, last epoch lowered it by %.2g of "
                       "itself). %s, or use `solver exact`",
                       g->stop == GRADIENT_DIVERGED ? "the cost rose"
                       : g->stop == GRADIENT_NOTHING ? "nothing to fit"
                       : "it reached the epoch cap", g->iterations,
                       g->iterations == 1 ? "" : "s", g->cost,
                       g->last_drop, g->stop == GRADIENT_DIVERGED
                       ? "Lower `rate`" : j->rate_line
                       ? "Raise `epochs`, or remove `rate` (the default step "
                         "lowers the cost at every epoch)" : "Raise `epochs`");
        goto out;
    }
    for (size_t k = 0, c = 0; k < p; k++)
        beta[k] = drop[k] == LINEAR_KEPT ? g->beta[c++] : NAN;
    memcpy(exact, logistic ? f->logit->beta : f->lin->beta,
           p * sizeof *exact);
    if (logistic) {
        if ((st = logistic_set_beta(f->logit, d->X, yk, beta, err)))
            goto out;
    } else {
        linear_set_beta(f->lin, d->X, d->y, beta);
    }
    f->rm.agree_digits = agree_digits(beta, exact, drop, p);
    f->rm.gradient = g;
out:
    free(Xk);
    free(yk);
    free(beta);
    free(exact);
    return st;
}

/* The logistic model: the exact fit (also the rank decisions and the
 * separation check for solver gradient), then the measures of its
 * probabilities. Separation without a penalty and non-convergence stop
 * the job, at the model line, with what to do. */
static rf_status fit_logistic(const job *j, const design *d, fit *f,
                              rf_warnings *warn, rf_error *err)
{
    size_t n = d->n_fit;
    if ((f->y = malloc((n ? n : 1) * sizeof *f->y)) == NULL)
        return error_nomem(err, NULL);
    for (size_t i = 0; i < n; i++)
        f->y[i] = (double)d->y[i];
    rf_status st;
    if (j->ridge_auto && (st = ridge_auto(j, d, f, err)))
        return st;
    st = logistic_fit(d->X, f->y, n, d->p, d->intercept, j->level,
                      f->rm.ridge, &f->logit, err);
    if (st)
        return at_model(j, st, err);
    const logistic_model *m = f->logit;
    char where[ERROR_WHERE_MAX];
    snprintf(where, sizeof where, "%s:%d", j->file, j->model_line);
    if (m->separation != SEPARATION_NONE && f->rm.ridge == 0) {
        const char *term = m->separating_term >= 0
            ? d->term[m->separating_term] : "the inputs";
        return error_set(err, RF_EINPUT, where,
                         "the classes are %s separated: '%s' (with the other "
                         "inputs) tells %s fitted row's class exactly, so "
                         "the coefficients grow without bound and have no "
                         "maximum likelihood estimate. Add a line `ridge 1` "
                         "(an L2 penalty) for finite estimates, or remove "
                         "or regroup that input",
                         m->separation == SEPARATION_COMPLETE ? "completely"
                                                              : "partly",
                         term, m->separation == SEPARATION_COMPLETE
                         ? "every" : "some");
    }
    if (!m->converged)
        return error_set(err, RF_EINPUT, where,
                         "the logistic fit did not converge in %d Newton "
                         "steps (%s); a `ridge` penalty, fewer terms or "
                         "rescaled inputs help", m->iterations,
                         m->iterations >= LOGISTIC_ITER_MAX
                         ? "the step cap" : "no step improved the fit");
    f->rm.logistic = m;
    if ((st = cross_validate(j, d, f, warn, err)))
        return st;
    if (j->solver == SOLVER_GRADIENT
        && (st = fit_gradient(j, d, f, m->drop, err)))
        return st;
    if ((st = classify_measure(f->y, m->prob, n, j->threshold, &f->cm,
                               err)))
        return at_model(j, st, err);
    f->rm.cm = &f->cm;
    return RF_OK;
}

/* The penalised linear fit, exact: its coefficients replace the least
 * squares ones, which decided the rank. */
static rf_status fit_ridge(const job *j, const design *d, fit *f,
                           rf_error *err)
{
    double *beta = malloc(d->p * sizeof *beta);
    if (beta == NULL)
        return error_nomem(err, NULL);
    rf_status st = ridge_fit(d->X, d->y, d->n_fit, d->p, d->intercept,
                             f->lin->drop, f->rm.ridge, beta, err);
    if (st == RF_OK)
        linear_set_beta(f->lin, d->X, d->y, beta);
    free(beta);
    return at_model(j, st, err);
}

/* The job's model on the design, every step in order. */
/* Rows a weight, below which the job warns (common practice: ten rows
 * for every weight a network learns). */
#define NETWORK_ROWS_PER_WEIGHT 10

/* model network: train on every fitted row (its own held-out slice inside),
 * the fitted rows' estimates and measures, cross-validation by training
 * each fold, the permutation importance of each input. */
static rf_status fit_network(const job *j, const design *d, fit *f,
                             network_progress epoch, void *ctx,
                             rf_warnings *warn, rf_error *err)
{
    size_t n = d->n_fit, p = d->p;
    network_options *o = &f->net_opt;
    network_options_init(o);
    o->n_hidden = (size_t)j->n_hidden;
    for (size_t l = 0; l < o->n_hidden; l++)
        o->hidden[l] = (size_t)j->hidden[l];
    o->classify = d->binary;
    o->solver = j->solver == SOLVER_LBFGS ? NETWORK_LBFGS
              : j->solver == SOLVER_ADAM ? NETWORK_ADAM : NETWORK_SOLVER_AUTO;
    o->ridge = j->ridge;
    o->rate = j->rate;
    o->epochs = j->epochs;
    o->seed = j->seed;
    o->restarts = j->restarts > 0 ? (size_t)j->restarts : 1;
    if ((f->y = malloc((n ? n : 1) * sizeof *f->y)) == NULL
        || (f->fitted = malloc((n ? n : 1) * sizeof *f->fitted)) == NULL
        || (f->importance = calloc(d->n_inputs ? d->n_inputs : 1,
                                   sizeof *f->importance)) == NULL)
        return error_nomem(err, NULL);
    for (size_t i = 0; i < n; i++)
        f->y[i] = (double)d->y[i];

    /* cross-validation first: its fold trainings report no progress */
    rf_status st = cross_validate(j, d, f, warn, err);
    if (st)
        return st;
    o->progress = epoch;
    o->progress_ctx = ctx;
    st = network_fit(d->X, f->y, n, p, o, &f->net, err);
    o->progress = NULL;
    if (st == RF_EINPUT && j->rate_line && err->where[0] == '\0'
        && strstr(err->message, "non-finite"))
        snprintf(err->where, sizeof err->where, "%s:%d", j->file,
                 j->rate_line);   /* the rate is what to change */
    if (st)
        return at_model(j, st, err);
    char where[ERROR_WHERE_MAX];
    if (j->level_line) {
        snprintf(where, sizeof where, "%s:%d", j->file, j->level_line);
        if ((st = error_warn(warn, where, "level does not apply to a "
                             "network, which gives no intervals; ignored")))
            return st;
    }
    if (j->threshold_line && !d->binary) {
        snprintf(where, sizeof where, "%s:%d", j->file, j->threshold_line);
        if ((st = error_warn(warn, where, "threshold applies to a yes/no "
                             "target, and '%s' is numeric here; ignored "
                             "(`positive LABEL` makes a network a yes/no "
                             "model)", j->target.name)))
            return st;
    }
    const network_model *m = f->net;
    size_t w = network_weights(m);
    if (n < NETWORK_ROWS_PER_WEIGHT * w
        && (st = error_warn(warn, NULL, "the network has %zu weights to "
                            "learn from %zu fitted rows, fewer than %d rows "
                            "a weight (common practice): it may learn the "
                            "rows' noise. Fewer hidden units, a `ridge` "
                            "penalty or more rows are safer; compare its cv "
                            "measures with a linear or logistic model's",
                            w, n, NETWORK_ROWS_PER_WEIGHT)))
        return st;
    for (size_t i = 0; i < n; i++)
        f->fitted[i] = network_predict(m, d->X + i * p);
    if (d->binary) {
        if ((st = classify_measure(f->y, f->fitted, n, j->threshold, &f->cm,
                                   err)))
            return at_model(j, st, err);
        f->rm.cm = &f->cm;
    } else {
        long double sse = 0, sae = 0, sy = 0, tss = 0;
        for (size_t i = 0; i < n; i++) {
            long double e = (long double)f->y[i] - f->fitted[i];
            sse += e * e;
            sae += fabsl(e);
            sy += f->y[i];
        }
        for (size_t i = 0; i < n; i++)
            tss += (f->y[i] - sy / n) * (f->y[i] - sy / n);
        f->rm.rmse = sqrt((double)(sse / n));
        f->rm.mae = (double)(sae / n);
        f->rm.r2 = tss > 0 ? (double)(1 - sse / tss) : NAN;
    }
    /* the importance of each input as the job names it: a category's
     * indicator columns move together */
    size_t ni = d->n_inputs;
    size_t *first = malloc((ni ? ni : 1) * sizeof *first);
    size_t *len = malloc((ni ? ni : 1) * sizeof *len);
    if (first == NULL || len == NULL) {
        free(first);
        free(len);
        return error_nomem(err, NULL);
    }
    for (size_t k = 0; k < ni; k++) {
        first[k] = d->inputs[k].first_term;
        len[k] = design_input_terms(&d->inputs[k]);
    }
    st = network_importance(m, d->X, f->y, n, first, len, ni, j->seed,
                            f->importance, err);
    free(first);
    free(len);
    if (st)
        return at_model(j, st, err);
    f->rm.network = m;
    f->rm.fitted = f->fitted;
    f->rm.importance = f->importance;
    f->rm.classify = d->binary;
    return RF_OK;
}

static rf_status fit_model(const job *j, const design *d, fit *f,
                           network_progress epoch, void *ctx,
                           rf_warnings *warn, rf_error *err)
{
    rf_status st;
    f->rm.agree_digits = NAN;
    f->rm.ridge = j->ridge;
    if (j->model == MODEL_NETWORK)
        return fit_network(j, d, f, epoch, ctx, warn, err);
    f->rm.classify = d->binary;
    if (j->model == MODEL_LOGISTIC) {
        if ((st = fit_logistic(j, d, f, warn, err)))
            return st;
    } else {
        if ((st = linear_fit(d->X, d->y, d->n_fit, d->p, d->intercept,
                             j->level, &f->lin, err)))
            return at_model(j, st, err);
        f->rm.linear = f->lin;
        const linear_model *m = f->lin;
        if ((m->cond > COND_WARN || !m->refine_converged)
            && (st = error_warn(warn, NULL,
                                "the inputs are nearly collinear (condition "
                                "number %.2g after scaling): expect about %d "
                                "correct digits in the coefficients; centring "
                                "inputs or fewer polynomial terms helps",
                                m->cond, linear_accurate_digits(m))))
            return st;
        if (j->ridge_auto && (st = ridge_auto(j, d, f, err)))
            return st;
        /* cross-validation first: without a penalty it updates the least
         * squares factor, whose residuals a penalty would replace */
        if ((st = cross_validate(j, d, f, warn, err)))
            return st;
        if (f->rm.ridge > 0 && (st = fit_ridge(j, d, f, err)))
            return st;
        if (j->solver == SOLVER_GRADIENT
            && (st = fit_gradient(j, d, f, m->drop, err)))
            return st;
    }
    /* rows and terms that deserve a second look */
    st = f->lin ? diagnose_linear(f->lin, d->X, &f->diag, err)
                : diagnose_logistic(f->logit, d->X, f->y, &f->diag, err);
    if (st)
        return at_model(j, st, err);
    f->rm.diag = f->diag;
    if (f->lin) {
        if ((f->vif = malloc(d->p * sizeof *f->vif)) == NULL)
            return error_nomem(err, NULL);
        if ((st = diagnose_vif(d->X, d->n_fit, d->p, d->intercept,
                               f->lin->drop, f->vif, err)))
            return at_model(j, st, err);
        f->rm.vif = f->vif;
    }
    const linear_drop *drop = f->lin ? f->lin->drop : f->logit->drop;
    for (size_t k = 0; k < d->p; k++)
        if (drop[k] != LINEAR_KEPT
            && (st = error_warn(warn, NULL, "term '%s' was dropped; the "
                                "Coefficients sheet says why", d->term[k])))
            return st;
    return RF_OK;
}

rf_status fit_job(const job *j, const design *d, network_progress epoch,
                  void *ctx, fit **out, rf_warnings *warn, rf_error *err)
{
    fit *f = calloc(1, sizeof *f);
    *out = NULL;
    if (f == NULL)
        return error_nomem(err, NULL);
    rf_status st = fit_model(j, d, f, epoch, ctx, warn, err);
    if (st) {
        fit_free(f);
        return st;
    }
    *out = f;
    return RF_OK;
}

const fit_result *fit_report(const fit *f)
{
    return &f->rm;
}
