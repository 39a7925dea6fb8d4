/*
 * run.c: one job, end to end (see run.h).
 */
#include "run.h"

#include <errno.h>
#include <stdlib.h>
#include <math.h>
#include <stdio.h>
#include <string.h>
#include <sys/stat.h>
#include <time.h>

#include "../io/reader.h"
#include "../io/fileinfo.h"
#include "../io/table.h"
#include "../io/writer.h"
#include "classify.h"
#include "design.h"
#include "gradient.h"
#include "job.h"
#include "linear.h"
#include "logistic.h"
#include "report.h"
#include "validate.h"

#ifndef ROWFIT_VERSION
#define ROWFIT_VERSION "0.0.0"
#endif

/* Rows a sheet holds below its header row (ECMA-376 sheets have
 * 1,048,576 rows). */
#define SHEET_ROWS_MAX 1048575

/* A condition number past which the Summary's accurate-digits estimate
 * falls below 10, worth a warning (common practice: 1e8). */
#define COND_WARN 1e8

/* Reads one table the job names. A file that is not there is the job's
 * mistake (exit 1); one that exists but cannot be read is the system's. */
static rf_status read_table(const job *j, const job_table *jt,
                            const char *role, table **out, rf_warnings *warn,
                            rf_error *err)
{
    struct stat sb;
    if (stat(jt->resolved, &sb) != 0) {
        char where[ERROR_WHERE_MAX];
        snprintf(where, sizeof where, "%s:%d", j->file, jt->line);
        if (errno == ENOENT)
            return error_set(err, RF_EINPUT, where,
                             "the %s file '%s' does not exist (paths are "
                             "relative to the job file's folder: %s)",
                             role, jt->path, jt->resolved);
        return error_set(err, RF_ESYSTEM, where, "cannot open '%s': %s",
                         jt->path, strerror(errno));
    }
    if (S_ISDIR(sb.st_mode)) {
        char where[ERROR_WHERE_MAX];
        snprintf(where, sizeof where, "%s:%d", j->file, jt->line);
        return error_set(err, RF_EINPUT, where,
                         "the %s path '%s' is a folder, not a file", role,
                         jt->path);
    }
    reader_options o = { jt->sheet, (uint32_t)jt->header, jt->delimiter };
    return reader_read(jt->resolved, jt->path, &o, out, warn, err);
}

static double now_seconds(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + ts.tv_nsec * 1e-9;
}

/* Reports a finished stage and restarts the clock. */
static void stage(const run_options *opt, const char *what, size_t rows,
                  double *t0)
{
    double t = now_seconds();
    if (opt->progress)
        opt->progress(opt->progress_ctx, what, rows, t - *t0);
    *t0 = t;
}

/* One warning per distinct skip reason (the most frequent first, at most
 * SKIP_REASONS_SHOWN), placed at its first row, so `check` and a run tell
 * on the terminal what the Estimates statuses tell row by row. */
#define SKIP_REASONS_SHOWN 5
#define SKIP_REASONS_TRACKED 64

typedef struct skip_group {
    const char *why;
    size_t first, count;
} skip_group;

static rf_status warn_skips(const design *d, const table *data,
                            const table *score, rf_warnings *warn)
{
    skip_group g[SKIP_REASONS_TRACKED];
    size_t ng = 0, other = 0;
    for (size_t o = 0; o < d->n_rows; o++) {
        if (d->rows[o].status != ROW_SKIPPED)
            continue;
        size_t k = 0;
        while (k < ng && strcmp(g[k].why, d->rows[o].reason) != 0)
            k++;
        if (k == ng && ng == SKIP_REASONS_TRACKED) {
            other++;
            continue;
        }
        if (k == ng) {
            g[ng].why = d->rows[o].reason;
            g[ng].first = o;
            g[ng++].count = 0;
        }
        g[k].count++;
    }
    for (size_t shown = 0; shown < SKIP_REASONS_SHOWN && shown < ng; shown++) {
        size_t best = shown;
        for (size_t k = shown + 1; k < ng; k++)
            if (g[k].count > g[best].count)
                best = k;
        if (best != shown) {
            skip_group t = g[shown];
            g[shown] = g[best];
            g[best] = t;
        }
        const design_row *row = &d->rows[g[shown].first];
        char where[ERROR_WHERE_MAX];
        table_where(row->source == SOURCE_DATA ? data : score, row->row,
                    (size_t)-1, where, sizeof where);
        rf_status st = error_warn(warn, where, "%zu row%s skipped: %s%s",
                                  g[shown].count,
                                  g[shown].count == 1 ? "" : "s", g[shown].why,
                                  g[shown].count == 1 ? "" : " (the first here)");
        if (st)
            return st;
    }
    for (size_t k = SKIP_REASONS_SHOWN; k < ng; k++)
        other += g[k].count;
    if (other)
        return error_warn(warn, NULL, "%zu more rows skipped for other "
                          "reasons; each row's status says why", other);
    return RF_OK;
}

/* An error at the job's model line, unless the error has a place. */
static rf_status at_model(const job *j, rf_status st, rf_error *err)
{
    if (st != RF_OK && err->where[0] == '\0')
        snprintf(err->where, sizeof err->where, "%s:%d", j->file,
                 j->model_line);
    return st;
}

/* Everything a fit produces, owned here. */
typedef struct fit {
    linear_model *lin;
    logistic_model *logit;
    gradient_model *grad;
    double *y;               /* logistic: the 0/1 target as doubles */
    classify_measures cm;
    report_model rm;
    /* cross-validation */
    report_cv cv;
    size_t *fold;
    double *cv_pred;
    validate_result *cv_res;
    validate_calibration *cv_cal;
} fit;

static void fit_free(fit *f)
{
    linear_free(f->lin);
    logistic_free(f->logit);
    gradient_free(f->grad);
    free(f->y);
    free(f->fold);
    free(f->cv_pred);
    validate_free(f->cv_res);
    validate_calibration_free(f->cv_cal);
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

/* Logistic folds: each fold's training rows refitted by logistic_fit (the
 * standardizing of the ridge penalty and the rank decisions are then the
 * training rows' own), its held-out rows given their probability. A fold
 * that separates without a penalty, or does not converge, gives its rows
 * no probability (NaN) and counts as failed. */
static rf_status cv_logistic(const job *j, const design *d, fit *f,
                             rf_error *err)
{
    size_t n = d->n_fit, p = d->p, k = f->cv.k;
    long double *Xt = malloc((n ? n : 1) * p * sizeof *Xt);
    double *yt = malloc((n ? n : 1) * sizeof *yt);
    rf_status st = RF_OK;
    if (Xt == NULL || yt == NULL) {
        st = error_nomem(err, NULL);
        goto out;
    }
    for (size_t fo = 0; fo < k; fo++) {
        size_t nt = 0;
        for (size_t i = 0; i < n; i++)
            if (f->fold[i] != fo) {
                memcpy(Xt + nt * p, d->X + i * p, p * sizeof *Xt);
                yt[nt++] = f->y[i];
            }
        logistic_model *m = NULL;
        rf_error e2;
        memset(&e2, 0, sizeof e2);
        st = logistic_fit(Xt, yt, nt, p, d->intercept, j->level, j->ridge,
                          &m, &e2);
        if (st == RF_ENOMEM || st == RF_ESYSTEM) {
            *err = e2;
            goto out;
        }
        int ok = st == RF_OK && m->converged
                 && (m->separation == SEPARATION_NONE || j->ridge > 0);
        st = RF_OK;
        for (size_t i = 0; i < n; i++)
            if (f->fold[i] == fo)
                f->cv_pred[i] = ok ? logistic_predict(m, d->X + i * p) : NAN;
        f->cv.failed += !ok;
        logistic_free(m);
    }
out:
    free(Xt);
    free(yt);
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
    for (size_t c = 0; c < k; c++)
        map[c] = (size_t)-1;
    for (size_t i = 0; i < n; i++) {
        if (!isfinite(f->cv_pred[i]))
            continue;
        if (map[f->fold[i]] == (size_t)-1)
            map[f->fold[i]] = km++;
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

/* k-fold cross-validation of the fitted model (before solver gradient
 * replaces the exact coefficients: the folds are fitted by the exact
 * solver of the same problem). */
static rf_status cross_validate(const job *j, const design *d, fit *f,
                                rf_warnings *warn, rf_error *err)
{
    size_t n = d->n_fit, k = job_folds(j, n);
    if (k == 0)
        return RF_OK;
    if (k > n) {
        char where[ERROR_WHERE_MAX];
        snprintf(where, sizeof where, "%s:%d", j->file, j->folds_line);
        return error_set(err, RF_EINPUT, where, "folds %zu needs at least "
                         "%zu fitted rows; there are %zu", k, k, n);
    }
    int classify = j->model == MODEL_LOGISTIC;
    f->cv.k = k;
    f->cv.seed = j->seed;
    f->cv.stratified = classify;
    f->fold = malloc(n * sizeof *f->fold);
    f->cv_pred = malloc(n * sizeof *f->cv_pred);
    if (f->fold == NULL || f->cv_pred == NULL)
        return error_nomem(err, NULL);
    rf_status st = validate_folds(n, k, j->seed, classify ? f->y : NULL,
                                  f->fold, err);
    if (st)
        return at_model(j, st, err);
    if (classify) {
        f->cv.method = "each fold's training rows refitted by Newton's "
                       "method (IRLS)";
        st = cv_logistic(j, d, f, err);
    } else {
        f->cv.method = "each fold's estimates updated from the full fit's "
                       "QR factor (exact, the same as refitting)";
        st = linear_cv(f->lin, d->X, d->y, f->fold, k, f->cv_pred,
                       &f->cv.refits, err);
        st = at_model(j, st, err);
    }
    if (st)
        return st;
    if (f->cv.failed
        && (st = error_warn(warn, NULL, "cross-validation: %zu of %zu "
                            "folds could not be fitted (the classes are "
                            "separated within their training rows); their "
                            "rows have no cv probability. A `ridge` "
                            "penalty helps", f->cv.failed, k)))
        return st;
    if ((st = cv_measure(j, d, f, classify, err)))
        return st;
    f->cv.pred = f->cv_pred;
    f->cv.res = f->cv_res;
    f->cv.cal = f->cv_cal;
    f->rm.cv = &f->cv;
    return RF_OK;
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
    st = gradient_fit(Xk, yk, n, pk, icpt, logistic, j->ridge, j->rate,
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
    /* the exact linear fit has no penalty: nothing to compare with */
    f->rm.agree_digits = !logistic && j->ridge > 0
        ? NAN : agree_digits(beta, exact, drop, p);
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
    rf_status st = logistic_fit(d->X, f->y, n, d->p, d->intercept, j->level,
                                j->ridge, &f->logit, err);
    if (st)
        return at_model(j, st, err);
    const logistic_model *m = f->logit;
    char where[ERROR_WHERE_MAX];
    snprintf(where, sizeof where, "%s:%d", j->file, j->model_line);
    if (m->separation != SEPARATION_NONE && j->ridge == 0) {
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

static rf_status fit_model(const job *j, const design *d, fit *f,
                           rf_warnings *warn, rf_error *err)
{
    rf_status st;
    memset(f, 0, sizeof *f);
    f->rm.agree_digits = NAN;
    f->rm.ridge = j->ridge;
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
        if ((st = cross_validate(j, d, f, warn, err)))
            return st;
        if (j->solver == SOLVER_GRADIENT
            && (st = fit_gradient(j, d, f, m->drop, err)))
            return st;
    }
    const linear_drop *drop = f->lin ? f->lin->drop : f->logit->drop;
    for (size_t k = 0; k < d->p; k++)
        if (drop[k] != LINEAR_KEPT
            && (st = error_warn(warn, NULL, "term '%s' was dropped; the "
                                "Coefficients sheet says why", d->term[k])))
            return st;
    return RF_OK;
}

rf_status run_job(const char *path, const run_options *opt, rf_warnings *warn,
                  run_result *res, rf_error *err)
{
    double t0 = now_seconds();
    memset(res, 0, sizeof *res);
    job *j = NULL;
    table *data = NULL, *score = NULL;
    design *d = NULL;
    fit f;
    memset(&f, 0, sizeof f);
    writer *w = NULL;
    rf_status st;

    char started[64];
    time_t now = time(NULL);
    struct tm tmv;
    strftime(started, sizeof started, "%Y-%m-%dT%H:%M:%S%z",
             localtime_r(&now, &tmv));

    if ((st = job_read(path, &j, err)))
        goto done;
    if ((st = read_table(j, &j->data, "data", &data, warn, err)))
        goto done;
    if (j->score.path
        && (st = read_table(j, &j->score, "score", &score, warn, err)))
        goto done;
    stage(opt, "read", table_rows(data) + (score ? table_rows(score) : 0),
          &t0);
    if ((st = design_build(j, data, score, &d, warn, err)))
        goto done;
    stage(opt, "checked", d->n_rows, &t0);
    res->rows_fitted = d->n_fit;
    res->rows_estimated = d->n_est;
    res->rows_skipped = d->rows_skipped;
    res->terms = d->p;
    if ((st = warn_skips(d, data, score, warn)))
        goto done;
    if (d->n_rows > SHEET_ROWS_MAX) {
        char where[ERROR_WHERE_MAX];
        snprintf(where, sizeof where, "%s:%d", j->file, j->data.line);
        st = error_set(err, RF_EINPUT, where,
                       "%zu rows in all: the Estimates sheet can hold at most "
                       "%d below its header", d->n_rows, SHEET_ROWS_MAX);
        goto done;
    }
    const char *out = opt->output ? opt->output : j->output_resolved;
    const char *inputs[3] = { j->data.resolved, path,
                              j->score.path ? j->score.resolved : NULL };
    size_t n_inputs = j->score.path ? 3 : 2;
    if ((st = writer_check(out, opt->force, inputs, n_inputs, err)))
        goto done;
    if (opt->check_only)
        goto done;

    if ((st = fit_model(j, d, &f, warn, err)))
        goto done;
    stage(opt, "fitted", d->n_fit, &t0);

    report_facts facts;
    memset(&facts, 0, sizeof facts);
    facts.version = ROWFIT_VERSION;
    facts.started = started;
    facts.files[0] = j->file;
    facts.files[1] = j->data.path;
    facts.files[2] = j->score.path;
    const char *paths[3] = { path, j->data.resolved, j->score.resolved };
    for (int k = 0; k < 3; k++)
        if (facts.files[k]
            && (st = fileinfo_get(paths[k], facts.files[k], &facts.info[k],
                                  err)))
            goto done;
    facts.warnings = warn;

    if ((st = writer_open(out, opt->force, inputs, n_inputs,
                          "rowfit " ROWFIT_VERSION, &w, err)))
        goto done;
    writer_set_warnings(w, warn);
    if ((st = report_write(w, j, data, score, d, &f.rm, &facts, warn, err)))
        goto done;
    st = writer_commit(w, err);
    w = NULL;
    stage(opt, "wrote", d->n_rows, &t0);
    if (st == RF_OK)
        snprintf(res->written, sizeof res->written, "%s", out);
done:
    writer_abort(w);
    fit_free(&f);
    design_free(d);
    table_free(score);
    table_free(data);
    job_free(j);
    return st;
}
