/*
 * fuzz_job.c: libFuzzer harness for the job-file parser (engine/job.c).
 * The fuzzer's bytes are the job text; text with a NUL byte is skipped, as
 * job_read refuses it before parsing. A parsed job is walked (every name,
 * path and derive), each derive's formula is parsed as design_build would,
 * and job_nearest is asked for each name among the others. Crashes,
 * sanitizer reports and broken invariants (an error with an empty message,
 * a job on error, a required directive missing from a parsed job) are the
 * findings. Build and run: tests/fuzz/README.md.
 */
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "../../engine/formula.h"
#include "../../engine/job.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

static void check(int ok, const char *what)
{
    if (!ok) {
        fprintf(stderr, "fuzz_job: invariant broken: %s\n", what);
        abort();
    }
}

static void walk(const job *j)
{
    check(j->data.path != NULL && j->data.resolved != NULL, "no data");
    check(j->target.name != NULL, "no target");
    check(j->model != MODEL_NONE, "no model");
    check(j->n_inputs + j->n_categories > 0, "no input");
    check(j->name != NULL && j->output_resolved != NULL, "no name/output");
    (void)job_model_name(j->model);
    const char *names[64];
    size_t n = 0;
    for (size_t i = 0; i < j->n_inputs && n < 64; i++)
        names[n++] = j->inputs[i].name;
    for (size_t i = 0; i < j->n_categories && n < 64; i++)
        names[n++] = j->categories[i].name;
    for (size_t i = 0; i < n; i++) {
        check(names[i] != NULL, "a NULL name");
        (void)job_nearest(names[i], names, n);
    }
    for (size_t i = 0; i < j->n_derives; i++) {
        formula *f = NULL;
        rf_error e;
        memset(&e, 0, sizeof e);
        check(j->derives[i].name && j->derives[i].formula, "derive");
        if (formula_parse(j->derives[i].formula, "fuzz.job", &f, &e)
            == RF_OK) {
            for (size_t k = 0; k < formula_nrefs(f); k++)
                check(formula_ref(f, k) != NULL, "a NULL formula ref");
        } else {
            check(f == NULL && e.message[0] != '\0', "formula error");
        }
        formula_free(f);
    }
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    if (memchr(data, '\0', size) != NULL)
        return 0;
    char *text = malloc(size + 1);
    if (text == NULL)
        return 0;
    memcpy(text, data, size);
    text[size] = '\0';
    job *j = NULL;
    rf_error e;
    memset(&e, 0, sizeof e);
    rf_status st = job_parse(text, "dir/fuzz.job", &j, &e);
    if (st == RF_OK) {
        check(j != NULL, "ok without a job");
        walk(j);
    } else {
        check(j == NULL, "a job on error");
        check(e.status == st && e.message[0] != '\0',
              "an error without its record");
    }
    job_free(j);
    free(text);
    return 0;
}
