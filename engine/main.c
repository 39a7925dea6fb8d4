/*
 * main.c: the command line (docs/command-line.md). Parses arguments, runs
 * each job, prints messages as "rowfit: WHERE: WHAT" on stderr and picks
 * the exit status: 0 done, 1 the job or its data is wrong, 2 the command
 * line is wrong, 3 the system failed. Nothing else lives here.
 */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include <gsl/gsl_errno.h>

#include "../io/error.h"
#include "blascore.h"
#include "peek.h"
#include "run.h"

#ifndef ROWFIT_VERSION
#define ROWFIT_VERSION "0.0.0"
#endif

static const char usage[] =
    "usage: rowfit [options] JOB...       run each job file; write its result workbook\n"
    "       rowfit check [options] JOB... read and check each job and its data; write nothing\n"
    "       rowfit peek FILE [SHEET]      a workbook's sheets, or a sheet's (or CSV file's) columns\n"
    "       rowfit --help | --version\n"
    "\n"
    "options:\n"
    "  -o PATH       where the workbook goes (one job only)\n"
    "  -q, --quiet   no progress or summary lines\n"
    "  --force       allow replacing an existing file that rowfit did not write\n"
    "\n"
    "exit status: 0 done, 1 the job or its data is wrong, 2 the command line is\n"
    "wrong, 3 the system failed. The job-file language is in docs/job-file.md.\n";

static int bad_usage(const char *fmt, const char *arg)
{
    fprintf(stderr, "rowfit: ");
    fprintf(stderr, fmt, arg);
    fprintf(stderr, "\nrowfit: see 'rowfit --help'\n");
    return 2;
}

/* Progress on a terminal: one line per stage, with rows per second. */
static void show_progress(void *ctx, const char *stage, size_t rows,
                          double seconds)
{
    const char *job = ctx;
    if (seconds > 0)
        fprintf(stderr, "rowfit: %s: %s %zu rows in %.2f s (%.0f rows/s)\n",
                job, stage, rows, seconds, rows / seconds);
    else
        fprintf(stderr, "rowfit: %s: %s %zu rows\n", job, stage, rows);
}

/* Training progress on a terminal: one line, rewritten in place every
 * 25 steps (Adam epochs or L-BFGS iterations), cleared by the next
 * stage's line. */
static void show_epoch(void *ctx, long epoch, double train, double valid)
{
    if (epoch % 25 != 0)
        return;
    const char *job = ctx;
    if (isfinite(valid))
        fprintf(stderr, "\rrowfit: %s: training: step %ld, loss %.6g, "
                "held out %.6g   \r", job, epoch, train, valid);
    else
        fprintf(stderr, "\rrowfit: %s: training: step %ld, loss %.6g   \r",
                job, epoch, train);
}

static void print_error(const rf_error *e)
{
    if (e->where[0])
        fprintf(stderr, "rowfit: %s: %s\n", e->where, e->message);
    else
        fprintf(stderr, "rowfit: %s\n", e->message);
}

/* rowfit peek FILE [SHEET] */
static int peek(int argc, char **argv)
{
    if (argc < 1 || argc > 2)
        return bad_usage("%s", "peek takes a file and, optionally, a sheet");
    rf_warnings warn = { 0 };
    rf_error err = { 0 };
    char *text = NULL;
    rf_status st = peek_text(argv[0], argv[0], argc == 2 ? argv[1] : NULL,
                             &text, &warn, &err);
    for (size_t i = 0; i < warn.n; i++)
        fprintf(stderr, "rowfit: %s\n", warn.items[i]);
    error_warnings_clear(&warn);
    if (st != RF_OK) {
        print_error(&err);
        return error_exit_code(st);
    }
    fputs(text, stdout);
    free(text);
    return 0;
}

int main(int argc, char **argv)
{
    blascore_restart(argv);
    gsl_set_error_handler_off();
    int check = 0, quiet = 0, force = 0, first = 1;
    const char *output = NULL;
    const char *jobs[argc > 0 ? argc : 1];
    int njobs = 0, opts_done = 0;

    if (argc > 1 && strcmp(argv[1], "check") == 0) {
        check = 1;
        first = 2;
    } else if (argc > 1 && strcmp(argv[1], "peek") == 0) {
        return peek(argc - 2, argv + 2);
    }
    for (int i = first; i < argc; i++) {
        const char *a = argv[i];
        if (!opts_done && a[0] == '-' && a[1] != '\0') {
            if (strcmp(a, "--") == 0)
                opts_done = 1;
            else if (strcmp(a, "--help") == 0 || strcmp(a, "-h") == 0) {
                fputs(usage, stdout);
                return 0;
            } else if (strcmp(a, "--version") == 0) {
                printf("rowfit %s\nproducts: OpenBLAS, %s kernels\n",
                       ROWFIT_VERSION, blascore_name());
                return 0;
            } else if (strcmp(a, "-q") == 0 || strcmp(a, "--quiet") == 0)
                quiet = 1;
            else if (strcmp(a, "--force") == 0)
                force = 1;
            else if (strcmp(a, "-o") == 0) {
                if (i + 1 >= argc)
                    return bad_usage("%s needs a path", a);
                if (output)
                    return bad_usage("%s given twice", a);
                output = argv[++i];
            } else
                return bad_usage("unknown option '%s'", a);
        } else {
            jobs[njobs++] = a;
        }
    }
    if (njobs == 0)
        return bad_usage("%s", check ? "check: no job file given"
                                     : "no job file given");
    if (output && njobs > 1)
        return bad_usage("%s", "-o names one workbook, but more than one job "
                               "is given");
    if (output && check)
        return bad_usage("%s", "check writes nothing, so -o does not apply");

    int worst = 0;
    for (int k = 0; k < njobs; k++) {
        run_options opt = { output, check, force, NULL, NULL, NULL };
        if (!quiet && isatty(STDERR_FILENO)) {
            opt.progress = show_progress;
            opt.epoch = show_epoch;
            opt.progress_ctx = (void *)jobs[k];
        }
        rf_warnings warn = { 0 };
        rf_error err = { 0 };
        run_result res;
        rf_status st = run_job(jobs[k], &opt, &warn, &res, &err);
        for (size_t i = 0; i < warn.n; i++)
            fprintf(stderr, "rowfit: %s\n", warn.items[i]);
        if (warn.dropped)
            fprintf(stderr, "rowfit: warning: and %zu more warnings\n",
                    warn.dropped);
        error_warnings_clear(&warn);
        if (st != RF_OK) {
            print_error(&err);
            int code = error_exit_code(st);
            if (code > worst)
                worst = code;
            continue;
        }
        if (quiet)
            continue;
        if (check)
            printf("%s: ok: %zu rows to fit, %zu to estimate, %zu skipped, "
                   "%zu terms\n", jobs[k], res.rows_fitted,
                   res.rows_estimated, res.rows_skipped, res.terms);
        else
            printf("wrote %s (%zu rows fitted, %zu estimated, %zu skipped)\n",
                   res.written, res.rows_fitted, res.rows_estimated,
                   res.rows_skipped);
    }
    return worst;
}
