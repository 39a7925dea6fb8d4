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
#include "design.h"
#include "job.h"
#include "fit.h"
#include "report.h"

#ifndef ROWFIT_VERSION
#define ROWFIT_VERSION "0.0.0"
#endif

/* Rows a sheet holds below its header row (ECMA-376 sheets have
 * 1,048,576 rows). */
#define SHEET_ROWS_MAX 1048575


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

rf_status run_job(const char *path, const run_options *opt, rf_warnings *warn,
                  run_result *res, rf_error *err)
{
    double t0 = now_seconds();
    memset(res, 0, sizeof *res);
    job *j = NULL;
    table *data = NULL, *score = NULL;
    design *d = NULL;
    fit *f = NULL;
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

    if ((st = fit_job(j, d, opt->epoch, opt->progress_ctx, &f, warn,
                      err)))
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
    if ((st = report_write(w, j, data, score, d, fit_report(f), &facts, warn, err)))
        goto done;
    st = writer_commit(w, err);
    w = NULL;
    stage(opt, "wrote", d->n_rows, &t0);
    if (st == RF_OK)
        snprintf(res->written, sizeof res->written, "%s", out);
done:
    writer_abort(w);
    fit_free(f);
    design_free(d);
    table_free(score);
    table_free(data);
    job_free(j);
    return st;
}
