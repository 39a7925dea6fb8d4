/*
 * fuzz_formula.c: libFuzzer harness for the derive formula language
 * (engine/formula.c). The fuzzer's bytes are the formula; one that parses
 * is evaluated with three fixed sets of reference values (numbers, text,
 * a blank, a spreadsheet error, a date) and printed as a spreadsheet
 * formula. Crashes, sanitizer reports and broken invariants (an error with
 * an empty message, an evaluation failure without its reason, a
 * spreadsheet formula not starting with '=') are the findings. Build and
 * run: tests/fuzz/README.md.
 */
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "../../engine/formula.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

static void check(int ok, const char *what)
{
    if (!ok) {
        fprintf(stderr, "fuzz_formula: invariant broken: %s\n", what);
        abort();
    }
}

/* Reference value k of set s: the sets cycle through kinds so each ref
 * meets a number, text, a blank and an error across the three sets. */
static fvalue ref_value(size_t s, size_t k)
{
    fvalue v;
    memset(&v, 0, sizeof v);
    switch ((s + k) % 6) {
    case 0: v.type = FV_NUMBER; v.num = 2.385L; break;
    case 1: v.type = FV_TEXT; v.text = "Oakmere"; break;
    case 2: v.type = FV_NUMBER; v.num = -3; break;
    case 3: v.type = FV_BLANK; break;
    case 4: v.type = FV_NUMBER; v.num = 45731; break;  /* 2025-03-15 */
    default: v.type = FV_ERROR; v.text = "#N/A"; break;
    }
    return v;
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    if (memchr(data, '\0', size) != NULL)
        return 0;
    char *src = malloc(size + 1);
    if (src == NULL)
        return 0;
    memcpy(src, data, size);
    src[size] = '\0';
    formula *f = NULL;
    rf_error e;
    memset(&e, 0, sizeof e);
    if (formula_parse(src, "fuzz.job:1", &f, &e) != RF_OK) {
        check(f == NULL, "a formula on error");
        check(e.message[0] != '\0', "an error without a message");
        free(src);
        return 0;
    }
    size_t n = formula_nrefs(f);
    fvalue *refs = calloc(n ? n : 1, sizeof *refs);
    const char **cells = calloc(n ? n : 1, sizeof *cells);
    char (*names)[16] = calloc(n ? n : 1, sizeof *names);
    check(refs && cells && names, "harness allocation");
    for (size_t k = 0; k < n; k++) {
        check(formula_ref(f, k) != NULL, "a NULL ref");
        snprintf(names[k], sizeof names[k], "C%zu", k + 2);
        cells[k] = names[k];
    }
    for (size_t s = 0; s < 3; s++) {
        for (size_t k = 0; k < n; k++)
            refs[k] = ref_value(s, k);
        fvalue out;
        char why[256];
        memset(why, 0x55, sizeof why);
        if (formula_eval(f, refs, &out, why, sizeof why) == 0)
            check(out.type == FV_NUMBER || out.type == FV_TEXT
                  || out.type == FV_BLANK, "a result of no known type");
        else
            check(memchr(why, '\0', sizeof why) != NULL && why[0] != '\0',
                  "a failure without its reason");
    }
    char *sheet = formula_spreadsheet(f, cells);
    check(sheet != NULL && sheet[0] == '=', "spreadsheet formula");
    free(sheet);
    free(names);
    free(cells);
    free(refs);
    formula_free(f);
    free(src);
    return 0;
}
