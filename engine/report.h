/*
 * report.h: lays out the result workbook of a fitted job: the Estimates,
 * Coefficients, Summary, Validation (with cross-validation), Diagnostics
 * and Job sheets with the labels of docs/workbook.md, for linear and
 * logistic models fitted by either solver, with or without a penalty.
 * Knows what the sheets mean; io/writer.c knows how cells reach the file.
 */
#ifndef ROWFIT_REPORT_H
#define ROWFIT_REPORT_H

#include <stddef.h>

#include "../io/error.h"
#include "../io/fileinfo.h"
#include "../io/table.h"
#include "../io/writer.h"
#include "design.h"
#include "fit.h"
#include "job.h"

/* Run facts for the Job sheet. */
typedef struct report_facts {
    const char *version;
    const char *started;         /* local date and time, ISO 8601 */
    const char *files[3];        /* job, data, score (NULL when absent) */
    fileinfo info[3];
    const rf_warnings *warnings;
} report_facts;

/* Writes every sheet of the job into w. Warnings found while writing (a
 * value that could not be written) are appended to warn before the Job
 * sheet lists them. */
rf_status report_write(writer *w, const job *j, const table *data,
                       const table *score, const design *d,
                       const fit_result *rm, const report_facts *facts,
                       rf_warnings *warn, rf_error *err);

#endif
