/*
 * test_design.c: from a job and in-memory tables to the design
 * (engine/design.c): term order and names, category levels and their
 * reference, every reason a row is skipped, derived columns as inputs and
 * as the target, score tables, and every error and warning design_build
 * gives. Tables are built here cell by cell; the values are invented.
 */
#include "testutil.h"

#include <stdlib.h>
#include <string.h>

#include "../engine/design.h"
#include "../engine/job.h"
#include "../io/table.h"
#include "tabletest.h"

#define N(a) (sizeof(a) / sizeof((a)[0]))
#define JOB "t.job"

/* ------------------------------------------------------------ fixtures */

#define TABLE(file, names, cells) \
    tt_make_table((file), (names), N(names), (cells), N(cells) / N(names))

static job *parse_job(const char *text)
{
    job *j = NULL;
    rf_error e = {0};
    if (job_parse(text, JOB, &j, &e) != RF_OK)
        fail_msg("job_parse failed: %s: %s", e.where, e.message);
    return j;
}

/* Builds or fails the test. With w NULL, no warning is expected. */
static design *build_ok(const job *j, const table *data, const table *score,
                        rf_warnings *w)
{
    design *d = NULL;
    rf_error e = {0};
    rf_warnings none = {0};
    if (design_build(j, data, score, &d, w ? w : &none, &e) != RF_OK)
        fail_msg("design_build failed: %s: %s", e.where, e.message);
    assert_non_null(d);
    if (none.n > 0)
        fail_msg("unexpected warning: %s", none.items[0]);
    error_warnings_clear(&none);
    return d;
}

/* Expects RF_EINPUT at where (exactly) with every fragment in the
 * message; frees nothing. */
static void build_fails(const job *j, const table *data, const table *score,
                        const char *where, const char *frag1,
                        const char *frag2)
{
    design *d = (design *)&d;  /* must be reset to NULL */
    rf_error e = {0};
    rf_warnings w = {0};
    rf_status s = design_build(j, data, score, &d, &w, &e);
    error_warnings_clear(&w);
    if (s != RF_EINPUT || d != NULL || strcmp(e.where, where) != 0
        || strstr(e.message, frag1) == NULL
        || (frag2 && strstr(e.message, frag2) == NULL))
        fail_msg("got status %d at '%s': '%s'; expected '%s' with '%s'%s%s",
                 (int)s, e.where, e.message, where, frag1,
                 frag2 ? " and " : "", frag2 ? frag2 : "");
}

static int has_warning(const rf_warnings *w, const char *frag)
{
    for (size_t i = 0; i < w->n; i++)
        if (strstr(w->items[i], frag))
            return 1;
    return 0;
}

static void assert_skipped(const design *d, size_t o, const char *reason)
{
    assert_true(o < d->n_rows);
    if (d->rows[o].status != ROW_SKIPPED)
        fail_msg("row %zu has status %d, not skipped", o,
                 (int)d->rows[o].status);
    assert_non_null(d->rows[o].reason);
    assert_string_equal(d->rows[o].reason, reason);
    assert_null(design_row_x(d, o));
}

/* Fails unless the term names are exactly names[0..n-1]. */
static void assert_terms(const design *d, const char *const *names, size_t n)
{
    assert_int_equal(d->p, n);
    for (size_t k = 0; k < n; k++)
        assert_string_equal(d->term[k], names[k]);
}

/* ------------------------------------------------- numeric inputs */

static const char *const sales_cols[] = { "parcel", "price", "area",
                                          "bathrooms" };
static const char *const sales_cells[] = {
    "P-101", "182450.5", "94.25", "1.5",
    "P-102", "231900",   "121.7", "2",
    "P-103", "158300.25", "76.4", "1",
    "P-104", "",          "88.15", "1.5",  /* to estimate */
    "P-105", "275100",   "143.9", "2.5",
    "P-106", "204750",   "101.3", "2",
};

static void test_design_numeric_inputs_in_job_order(void **state)
{
    (void)state;
    job *j = parse_job("data t.csv\ntarget price\ninputs bathrooms, area\n"
                       "model linear\nid parcel\n");
    table *t = TABLE("t.csv", sales_cols, sales_cells);
    rf_warnings w = {0};
    design *d = build_ok(j, t, NULL, &w);
    assert_int_equal(w.n, 0);

    const char *const terms[] = { "(intercept)", "bathrooms", "area" };
    assert_terms(d, terms, N(terms));
    assert_int_equal(d->intercept, 1);
    assert_int_equal(d->n_rows, 6);
    assert_int_equal(d->n_fit, 5);
    assert_int_equal(d->n_est, 1);
    assert_int_equal(d->rows_skipped, 0);
    assert_int_equal(d->target_col, 1);
    assert_int_equal(d->id_col_data, 0);
    assert_int_equal(d->id_col_score, -1);
    assert_int_equal(d->n_inputs, 2);
    assert_string_equal(d->inputs[0].name, "bathrooms");
    assert_string_equal(d->inputs[1].name, "area");
    assert_int_equal(d->inputs[0].is_category, 0);
    assert_int_equal(d->inputs[0].line, 3);
    assert_int_equal(d->inputs[0].first_term, 1);
    assert_int_equal(d->inputs[1].first_term, 2);

    size_t fit = 0;
    for (size_t o = 0; o < 6; o++) {
        double price = strtod(sales_cells[o * 4 + 1], NULL);
        double area = strtod(sales_cells[o * 4 + 2], NULL);
        double baths = strtod(sales_cells[o * 4 + 3], NULL);
        const design_row *r = &d->rows[o];
        assert_int_equal(r->source, SOURCE_DATA);
        assert_int_equal(r->row, o);
        assert_null(r->reason);
        const long double *x = design_row_x(d, o);
        assert_non_null(x);
        assert_close((double)x[0], 1, 0, 0);
        assert_close((double)x[1], baths, 0, 0);
        assert_close((double)x[2], area, 0, 0);
        assert_close((double)d->inputs[1].value[o], area, 0, 0);
        if (o == 3) {
            assert_int_equal(r->status, ROW_ESTIMATED);
            assert_int_equal(r->index, 0);
            assert_ptr_equal(x, d->Xe);
            assert_true(isnan((double)d->target[o]));
        } else {
            assert_int_equal(r->status, ROW_FITTED);
            assert_int_equal(r->index, fit);
            assert_ptr_equal(x, d->X + fit * d->p);
            assert_close((double)d->y[fit], price, 0, 0);
            assert_close((double)d->target[o], price, 0, 0);
            fit++;
        }
    }
    design_free(d);
    table_free(t);
    job_free(j);
}

static void test_design_without_intercept_has_no_constant_term(void **state)
{
    (void)state;
    job *j = parse_job("data t.csv\ntarget price\ninputs area, bathrooms\n"
                       "model linear\nintercept no\n");
    table *t = TABLE("t.csv", sales_cols, sales_cells);
    design *d = build_ok(j, t, NULL, NULL);
    const char *const terms[] = { "area", "bathrooms" };
    assert_terms(d, terms, N(terms));
    assert_int_equal(d->intercept, 0);
    assert_int_equal(d->inputs[0].first_term, 0);
    assert_close((double)d->X[0], 94.25, 0, 0);
    assert_close((double)d->X[1], 1.5, 0, 0);
    design_free(d);
    table_free(t);
    job_free(j);
}

/* ------------------------------------------------------- categories */

/* Among fitted rows Riverside is the most frequent level (3), but Ashby is
 * the most frequent overall (1 fitted + 4 rows without a price). */
static const char *const dist_cols[] = { "price", "area", "district" };
static const char *const dist_cells[] = {
    "182450", "94.25", "Oakmere",
    "231900", "121.7", "Riverside",
    "",       "88.15", "Ashby",
    "158300", "76.4",  "Riverside",
    "",       "97.3",  "Ashby",
    "204750", "101.3", "Ashby",
    "",       "84.6",  "Ashby",
    "275100", "143.9", "Oakmere",
    "",       "110.2", "Ashby",
    "199400", "99.85", "Riverside",
};

static void test_design_category_reference_is_most_frequent_fitted(void **state)
{
    (void)state;
    job *j = parse_job("data t.csv\ntarget price\ninputs area\n"
                       "categories district\nmodel linear\n");
    table *t = TABLE("t.csv", dist_cols, dist_cells);
    design *d = build_ok(j, t, NULL, NULL);
    const char *const terms[] = { "(intercept)", "area", "district: Ashby",
                                  "district: Oakmere" };
    assert_terms(d, terms, N(terms));
    const design_input *in = &d->inputs[1];
    assert_int_equal(in->is_category, 1);
    assert_int_equal(in->n_levels, 3);
    assert_string_equal(in->levels[0], "Ashby");
    assert_string_equal(in->levels[1], "Oakmere");
    assert_string_equal(in->levels[2], "Riverside");
    assert_int_equal(in->reference, 2);
    assert_int_equal(in->first_term, 2);
    assert_int_equal(d->n_fit, 6);
    assert_int_equal(d->n_est, 4);

    for (size_t o = 0; o < d->n_rows; o++) {
        const char *dist = dist_cells[o * 3 + 2];
        const long double *x = design_row_x(d, o);
        assert_non_null(x);
        assert_string_equal(in->level[o], dist);
        assert_close((double)x[2], strcmp(dist, "Ashby") == 0, 0, 0);
        assert_close((double)x[3], strcmp(dist, "Oakmere") == 0, 0, 0);
        assert_int_equal(d->rows[o].status,
                         dist_cells[o * 3][0] ? ROW_FITTED : ROW_ESTIMATED);
    }
    design_free(d);
    table_free(t);
    job_free(j);
}

static void test_design_category_tie_takes_first_in_sort_order(void **state)
{
    (void)state;
    /* Oakmere and Cobble Hill twice each, Oakmere seen first: the tie goes
     * to Cobble Hill, first in sort order. Job order of the lists decides
     * the term order: district comes before age. */
    static const char *const cols[] = { "price", "district", "age" };
    static const char *const cells[] = {
        "182450", "Oakmere",     "12.5",
        "231900", "Cobble Hill", "3.25",
        "158300", "Oakmere",     "41",
        "204750", "Wendle",      "27.75",
        "275100", "Cobble Hill", "8.5",
        "199400", "Wendle",      "",      /* skipped: Wendle once fitted */
    };
    job *j = parse_job("data t.csv\ntarget price\ncategories district\n"
                       "inputs age\nmodel linear\n");
    table *t = TABLE("t.csv", cols, cells);
    design *d = build_ok(j, t, NULL, NULL);
    const char *const terms[] = { "(intercept)", "district: Oakmere",
                                  "district: Wendle", "age" };
    assert_terms(d, terms, N(terms));
    assert_string_equal(d->inputs[0].name, "district");
    assert_string_equal(d->inputs[1].name, "age");
    assert_string_equal(d->inputs[0].levels[d->inputs[0].reference],
                        "Cobble Hill");
    assert_skipped(d, 5, "age is blank");
    design_free(d);
    table_free(t);
    job_free(j);
}

static void test_design_numbers_as_category_levels(void **state)
{
    (void)state;
    static const char *const cols[] = { "price", "area", "district" };
    static const char *const cells[] = {
        "182450", "94.25", "2",
        "231900", "121.7", "1",
        "158300", "76.4",  "3",
        "204750", "101.3", "2",
        "275100", "143.9", "1",
        "199400", "99.85", "2",
        "187300", "90.05", "3",
    };
    job *j = parse_job("data t.csv\ntarget price\ninputs area\n"
                       "categories district\nmodel linear\n");
    table *t = TABLE("t.csv", cols, cells);
    design *d = build_ok(j, t, NULL, NULL);
    const design_input *in = &d->inputs[1];
    assert_int_equal(in->n_levels, 3);
    assert_string_equal(in->levels[0], "1");
    assert_string_equal(in->levels[1], "2");
    assert_string_equal(in->levels[2], "3");
    assert_int_equal(in->reference, 1);
    const char *const terms[] = { "(intercept)", "area", "district: 1",
                                  "district: 3" };
    assert_terms(d, terms, N(terms));
    design_free(d);
    table_free(t);
    job_free(j);
}

static void test_design_single_level_category_warns_and_adds_no_term(void **state)
{
    (void)state;
    static const char *const cols[] = { "price", "area", "district" };
    static const char *const cells[] = {
        "182450", "94.25", "Oakmere",
        "231900", "121.7", "Oakmere",
        "158300", "76.4",  "Oakmere",
        "",       "101.3", "Oakmere",
    };
    job *j = parse_job("data t.csv\ntarget price\ninputs area\n"
                       "categories district\nmodel linear\n");
    table *t = TABLE("t.csv", cols, cells);
    rf_warnings w = {0};
    design *d = build_ok(j, t, NULL, &w);
    const char *const terms[] = { "(intercept)", "area" };
    assert_terms(d, terms, N(terms));
    assert_int_equal(d->inputs[1].n_levels, 1);
    assert_int_equal(w.n, 1);
    assert_true(has_warning(&w, "category 'district' has a single level "
                                "('Oakmere')"));
    assert_int_equal(d->rows[3].status, ROW_ESTIMATED);
    error_warnings_clear(&w);
    design_free(d);
    table_free(t);
    job_free(j);
}

static void test_design_no_terms_at_all_is_error(void **state)
{
    (void)state;
    /* No intercept, and no fitted row gives the category a level: there
     * is no term at all. This once divided by zero (p == 0) in the size
     * check; it must be a clean RF_EINPUT. */
    static const char *const cols[] = { "price", "district" };
    static const char *const cells[] = {
        "", "Oakmere", "", "Oakmere", "", "Ashby",
    };
    job *j = parse_job("data t.csv\ntarget price\ncategories district\n"
                       "model linear\nintercept no\n");
    table *t = TABLE("t.csv", cols, cells);
    design *d = (design *)&d;
    rf_error e = {0};
    rf_warnings w = {0};
    assert_int_equal(design_build(j, t, NULL, &d, &w, &e), RF_EINPUT);
    assert_null(d);
    error_warnings_clear(&w);
    table_free(t);
    job_free(j);
}

/* Without an intercept the first category keeps every level as a term
 * (full indicator coding: its levels carry the constant; common practice). */
static void test_design_no_intercept_first_category_keeps_every_level(void **state)
{
    (void)state;
    static const char *const cols[] = { "price", "area", "district" };
    static const char *const cells[] = {
        "182450", "94.25", "Oakmere", "231900", "121.7", "Ashby",
        "158300", "76.4", "Oakmere",  "204750", "101.3", "Ashby",
        "275100", "143.9", "Oakmere",
    };
    job *j = parse_job("data t.csv\ntarget price\ninputs area\n"
                       "categories district\nmodel linear\nintercept no\n");
    table *t = TABLE("t.csv", cols, cells);
    design *d = NULL;
    rf_error e = {0};
    rf_warnings w = {0};
    assert_int_equal(design_build(j, t, NULL, &d, &w, &e), RF_OK);
    assert_int_equal(d->p, 3);
    assert_string_equal(d->term[0], "area");
    assert_string_equal(d->term[1], "district: Ashby");
    assert_string_equal(d->term[2], "district: Oakmere");
    assert_true(d->inputs[1].reference == DESIGN_NO_REFERENCE);
    assert_int_equal(design_input_terms(&d->inputs[1]), 2);
    /* row 0 is Oakmere: indicators (0, 1); row 1 Ashby: (1, 0) */
    assert_true(d->X[0 * 3 + 1] == 0 && d->X[0 * 3 + 2] == 1);
    assert_true(d->X[1 * 3 + 1] == 1 && d->X[1 * 3 + 2] == 0);
    assert_int_equal(w.n, 0);
    design_free(d);
    error_warnings_clear(&w);
    table_free(t);
    job_free(j);
}

static void test_design_unusable_category_cells_are_skipped(void **state)
{
    (void)state;
    static const char *const cols[] = { "price", "area", "district" };
    static const char *const cells[] = {
        "182450", "94.25", "Oakmere",
        "231900", "121.7", "",
        "158300", "76.4",  "#REF!",
        "204750", "101.3", "Ashby",
        "275100", "143.9", "Oakmere",
        "199400", "99.85", "Ashby",
        "",       "88.15", "Hillcrest",  /* level never fitted */
    };
    job *j = parse_job("data t.csv\ntarget price\ninputs area\n"
                       "categories district\nmodel linear\n");
    table *t = TABLE("t.csv", cols, cells);
    design *d = build_ok(j, t, NULL, NULL);
    assert_skipped(d, 1, "district is blank");
    assert_skipped(d, 2, "district is #REF!");
    assert_skipped(d, 6, "district 'Hillcrest' does not occur in the fitted "
                         "rows");
    assert_null(d->inputs[1].level[1]);
    assert_int_equal(d->n_fit, 4);
    assert_int_equal(d->n_est, 0);
    assert_int_equal(d->rows_skipped, 3);
    design_free(d);
    table_free(t);
    job_free(j);
}

/* ------------------------------------------------ skipped rows */

static const char *const bad_cols[] = { "price", "age", "bathrooms" };
static const char *const bad_cells[] = {
    "182450", "12.5",  "1.5",
    "231900", "3.25",  "",       /* 1: bathrooms blank */
    "158300", "n/a",   "1",      /* 2: text */
    "204750", "#N/A",  "2",      /* 3: error cell */
    "",       "27.75", "2.5",    /* 4: estimated */
    "abc",    "8.5",   "2",      /* 5: text target */
    "199400", "n/a",   "",       /* 6: the first input in job order */
    "275100", "5.75",  "2.5",
    "187300", "33.5",  "1.5",
    "214600", "19.25", "2",
};

static void test_design_unusable_cells_skip_row_with_reason(void **state)
{
    (void)state;
    job *j = parse_job("data t.csv\ntarget price\ninputs age, bathrooms\n"
                       "model linear\n");
    table *t = TABLE("t.csv", bad_cols, bad_cells);
    design *d = build_ok(j, t, NULL, NULL);
    assert_skipped(d, 1, "bathrooms is blank");
    assert_skipped(d, 2, "age is 'n/a', not a number");
    assert_skipped(d, 3, "age is #N/A");
    assert_skipped(d, 5, "price is 'abc', not a number");
    assert_skipped(d, 6, "age is 'n/a', not a number");
    assert_int_equal(d->rows[4].status, ROW_ESTIMATED);
    assert_null(d->rows[4].reason);
    assert_int_equal(d->rows_skipped, 5);
    assert_int_equal(d->n_fit, 4);
    assert_int_equal(d->n_est, 1);
    assert_true(isnan((double)d->inputs[0].value[2]));
    assert_close((double)d->X[d->p + 1], 5.75, 0, 0);  /* fitted row 2 */
    design_free(d);
    table_free(t);
    job_free(j);
}

static void test_design_missing_stop_names_the_cell(void **state)
{
    (void)state;
    /* rows 0-2 are usable; row 3 (line 5) has an error cell */
    static const char *const cells[] = {
        "182450", "12.5",  "1.5",
        "",       "3.25",  "2",     /* blank target: estimated, no error */
        "158300", "41",    "1",
        "204750", "#N/A",  "2",
        "275100", "5.75",  "",
    };
    job *j = parse_job("data t.csv\ntarget price\ninputs age, bathrooms\n"
                       "model linear\nmissing stop\n");
    table *t = TABLE("t.csv", bad_cols, cells);
    build_fails(j, t, NULL, "t.csv:5", "age is #N/A", "missing stop");
    table_free(t);
    job_free(j);
}

static void test_design_too_few_rows_gives_first_reason(void **state)
{
    (void)state;
    static const char *const cells[] = {
        "182450", "12.5",  "1.5",
        "231900", "3.25",  "",
        "158300", "41",    "1",
        "204750", "n/a",   "2",
        "275100", "5.75",  "2.5",
    };
    job *j = parse_job("data t.csv\ntarget price\ninputs age, bathrooms\n"
                       "model linear\n");
    table *t = TABLE("t.csv", bad_cols, cells);
    build_fails(j, t, NULL, JOB ":2", "fewer rows than terms",
                "the first because bathrooms is blank");
    table_free(t);
    job_free(j);
}

/* ----------------------------------------------------------- derives */

static const char *const der_cols[] = { "price", "year_built", "area" };
static const char *const der_cells[] = {
    "182450",  "1987", "94.25",
    "231900",  "2004", "121.7",
    "",        "1962", "76.4",    /* 2: target blank -> estimated */
    "-158300", "1995", "101.3",   /* 3: LN of a negative -> skipped */
    "204750",  "",     "88.15",   /* 4: source of b blank -> skipped */
    "275100",  "2016", "143.9",
    "199400",  "1978", "99.85",
};

#define DER_JOB "data t.csv\ntarget lp\ninputs c, area\nmodel linear\n" \
                "derive a = 2026 - year_built\nderive b = a * 1.5\n"      \
                "derive c = b + area / 4\nderive lp = LN(price)\n"

static void test_design_derive_chain_as_input_and_target(void **state)
{
    (void)state;
    job *j = parse_job(DER_JOB);
    table *t = TABLE("t.csv", der_cols, der_cells);
    design *d = build_ok(j, t, NULL, NULL);
    const char *const terms[] = { "(intercept)", "c", "area" };
    assert_terms(d, terms, N(terms));
    assert_int_equal(d->target_col, -1);
    assert_int_equal(d->rows[2].status, ROW_ESTIMATED);
    assert_int_equal(d->rows[3].status, ROW_SKIPPED);
    assert_non_null(strstr(d->rows[3].reason, "LN"));
    /* a computation failure names the derive; a cell problem names the cell */
    assert_true(strncmp(d->rows[3].reason, "lp: ", 4) == 0);
    assert_skipped(d, 4, "year_built is blank");
    assert_int_equal(d->n_fit, 4);
    assert_int_equal(d->n_est, 1);
    for (size_t o = 0; o < d->n_rows; o++) {
        if (d->rows[o].status == ROW_SKIPPED)
            continue;
        double price = strtod(der_cells[o * 3], NULL);
        double yb = strtod(der_cells[o * 3 + 1], NULL);
        double area = strtod(der_cells[o * 3 + 2], NULL);
        const long double *x = design_row_x(d, o);
        assert_close((double)x[1], (2026 - yb) * 1.5 + area / 4, 1e-15, 0);
        assert_close((double)x[2], area, 0, 0);
        if (d->rows[o].status == ROW_FITTED) {
            assert_close((double)d->y[d->rows[o].index], log(price), 1e-15, 0);
            assert_close((double)d->target[o], log(price), 1e-15, 0);
        }
    }
    design_free(d);
    table_free(t);
    job_free(j);
}

static void test_design_derived_target_through_chain_blank_is_estimated(
    void **state)
{
    (void)state;
    /* the blank price is two derives below the target */
    job *j = parse_job("data t.csv\ntarget lp\ninputs area\nmodel linear\n"
                       "derive k = price / 1000\nderive lp = LN(k)\n");
    table *t = TABLE("t.csv", der_cols, der_cells);
    design *d = build_ok(j, t, NULL, NULL);
    assert_int_equal(d->rows[2].status, ROW_ESTIMATED);
    assert_int_equal(d->rows[3].status, ROW_SKIPPED);
    assert_non_null(strstr(d->rows[3].reason, "LN"));
    assert_int_equal(d->rows[4].status, ROW_FITTED);  /* year_built unused */
    assert_close((double)d->target[0], log(182.450), 1e-15, 0);
    design_free(d);
    table_free(t);
    job_free(j);
}

static void test_design_missing_stop_on_failing_derive(void **state)
{
    (void)state;
    job *j = parse_job(DER_JOB "missing stop\n");
    table *t = TABLE("t.csv", der_cols, der_cells);
    build_fails(j, t, NULL, "t.csv:5", "LN", "missing stop");
    table_free(t);
    job_free(j);
}

static void test_design_derive_using_later_derive_is_error(void **state)
{
    (void)state;
    job *j = parse_job("data t.csv\ntarget price\ninputs b\nmodel linear\n"
                       "derive b = a * 2\nderive a = 2026 - year_built\n");
    table *t = TABLE("t.csv", der_cols, der_cells);
    build_fails(j, t, NULL, JOB ":5", "derive 'b' uses 'a'",
                "derived later, on line 6");
    table_free(t);
    job_free(j);
}

static void test_design_derive_named_like_column_is_error(void **state)
{
    (void)state;
    job *j = parse_job("data t.csv\ntarget price\ninputs area\nmodel linear\n"
                       "derive area = year_built * 2\n");
    table *t = TABLE("t.csv", der_cols, der_cells);
    build_fails(j, t, NULL, JOB ":5", "derive 'area' has the name of a "
                "column of t.csv", NULL);
    table_free(t);
    job_free(j);
}

static void test_design_derive_defined_twice_is_error(void **state)
{
    (void)state;
    /* job_parse refuses this itself; design_build checks again for jobs
     * built any other way, so the record is edited here. */
    job *j = parse_job("data t.csv\ntarget price\ninputs a\nmodel linear\n"
                       "derive a = area * 2\nderive z = area * 3\n");
    free(j->derives[1].name);
    j->derives[1].name = strdup("a");
    assert_non_null(j->derives[1].name);
    table *t = TABLE("t.csv", der_cols, der_cells);
    build_fails(j, t, NULL, JOB ":6", "'a' is already derived on line 5",
                NULL);
    table_free(t);
    job_free(j);
}

static void test_design_derive_that_does_not_parse_is_error(void **state)
{
    (void)state;
    job *j = parse_job("data t.csv\ntarget price\ninputs a\nmodel linear\n"
                       "derive a = (area * 2\n");
    table *t = TABLE("t.csv", der_cols, der_cells);
    design *d = (design *)&d;
    rf_error e = {0};
    rf_warnings w = {0};
    assert_int_equal(design_build(j, t, NULL, &d, &w, &e), RF_EINPUT);
    assert_null(d);
    assert_int_equal(e.status, RF_EINPUT);
    assert_string_equal(e.where, JOB ":5");
    error_warnings_clear(&w);
    table_free(t);
    job_free(j);
}

static void test_design_derive_with_unknown_column_is_error(void **state)
{
    (void)state;
    job *j = parse_job("data t.csv\ntarget price\ninputs a\nmodel linear\n"
                       "derive a = 2026 - year_bilt\n");
    table *t = TABLE("t.csv", der_cols, der_cells);
    build_fails(j, t, NULL, JOB ":5", "unknown column 'year_bilt'",
                "did you mean 'year_built'?");
    table_free(t);
    job_free(j);
}

/* ------------------------------------------------ names in the job */

static void test_design_unknown_input_suggests_nearest(void **state)
{
    (void)state;
    job *j = parse_job("data t.csv\ntarget price\ninputs area\n"
                       "inputs bathroms\nmodel linear\n");
    table *t = TABLE("t.csv", sales_cols, sales_cells);
    build_fails(j, t, NULL, JOB ":4", "unknown input 'bathroms'",
                "(did you mean 'bathrooms'?)");
    table_free(t);
    job_free(j);
}

static void test_design_unknown_names_without_suggestion(void **state)
{
    (void)state;
    table *t = TABLE("t.csv", sales_cols, sales_cells);
    job *j = parse_job("data t.csv\ntarget price\ninputs area\n"
                       "categories neighbourhood\nmodel linear\n");
    build_fails(j, t, NULL, JOB ":4", "unknown category 'neighbourhood'",
                "no such column or derive");
    job_free(j);
    j = parse_job("data t.csv\ntarget sale_value\ninputs area\n"
                  "model linear\n");
    build_fails(j, t, NULL, JOB ":2", "unknown target 'sale_value'", NULL);
    job_free(j);
    j = parse_job("data t.csv\ntarget price\ninputs area\nmodel linear\n"
                  "id parcels\n");
    build_fails(j, t, NULL, JOB ":5", "unknown id column 'parcels'",
                "did you mean 'parcel'?");
    job_free(j);
    table_free(t);
}

static void test_design_target_listed_as_input_is_error(void **state)
{
    (void)state;
    job *j = parse_job("data t.csv\ntarget price\ninputs area\n"
                       "inputs price\nmodel linear\n");
    table *t = TABLE("t.csv", sales_cols, sales_cells);
    build_fails(j, t, NULL, JOB ":4", "'price' is the target", NULL);
    table_free(t);
    job_free(j);
}

/* ------------------------------------------------------- score table */

static const char *const score_cols[] = { "parcel", "area", "district" };

static void test_design_score_rows_follow_data_rows(void **state)
{
    (void)state;
    static const char *const cells[] = {
        "S-201", "104.6", "Ashby",
        "S-202", "92.35", "Hillcrest",  /* never fitted */
        "S-203", "",      "Oakmere",
        "S-204", "131.2", "Riverside",
    };
    job *j = parse_job("data t.csv\nscore s.csv\ntarget price\ninputs area\n"
                       "categories district\nmodel linear\nid parcel\n");
    static const char *const dcols[] = { "parcel", "price", "area",
                                         "district" };
    static const char *const dcells[] = {
        "P-101", "182450", "94.25", "Oakmere",
        "P-102", "231900", "121.7", "Riverside",
        "P-103", "158300", "76.4",  "Ashby",
        "P-104", "",       "88.15", "Ashby",
        "P-105", "275100", "143.9", "Oakmere",
        "P-106", "204750", "101.3", "Riverside",
        "P-107", "199400", "99.85", "Oakmere",
    };
    table *t = TABLE("t.csv", dcols, dcells);
    table *s = TABLE("s.csv", score_cols, cells);
    rf_warnings w = {0};
    design *d = build_ok(j, t, s, &w);
    assert_int_equal(w.n, 0);
    assert_int_equal(d->id_col_data, 0);
    assert_int_equal(d->id_col_score, 0);
    assert_int_equal(d->n_rows, 11);
    assert_int_equal(d->n_fit, 6);
    assert_int_equal(d->n_est, 3);
    for (size_t o = 0; o < 7; o++)
        assert_int_equal(d->rows[o].source, SOURCE_DATA);
    for (size_t o = 7; o < 11; o++) {
        assert_int_equal(d->rows[o].source, SOURCE_SCORE);
        assert_int_equal(d->rows[o].row, o - 7);
        assert_true(d->rows[o].status != ROW_FITTED);
        assert_true(isnan((double)d->target[o]));
    }
    assert_int_equal(d->rows[7].status, ROW_ESTIMATED);
    assert_int_equal(d->rows[7].index, 1);  /* after data row 3 */
    assert_skipped(d, 8, "district 'Hillcrest' does not occur in the fitted "
                         "rows");
    assert_skipped(d, 9, "area is blank");
    assert_int_equal(d->rows[10].status, ROW_ESTIMATED);
    /* Oakmere is the reference (3 fitted rows) */
    const char *const terms[] = { "(intercept)", "area", "district: Ashby",
                                  "district: Riverside" };
    assert_terms(d, terms, N(terms));
    const long double *x = design_row_x(d, 10);
    assert_close((double)x[1], 131.2, 0, 0);
    assert_close((double)x[2], 0, 0, 0);
    assert_close((double)x[3], 1, 0, 0);
    design_free(d);
    table_free(s);
    table_free(t);
    job_free(j);
}

static void test_design_score_without_id_column_warns(void **state)
{
    (void)state;
    static const char *const cols[] = { "area", "bathrooms" };
    static const char *const cells[] = { "104.6", "2", "92.35", "1.5" };
    job *j = parse_job("data t.csv\nscore s.csv\ntarget price\n"
                       "inputs area, bathrooms\nmodel linear\nid parcel\n");
    table *t = TABLE("t.csv", sales_cols, sales_cells);
    table *s = TABLE("s.csv", cols, cells);
    rf_warnings w = {0};
    design *d = build_ok(j, t, s, &w);
    assert_int_equal(d->id_col_score, -1);
    assert_int_equal(d->id_col_data, 0);
    assert_int_equal(w.n, 1);
    assert_true(has_warning(&w, "s.csv: warning: has no column 'parcel'"));
    assert_int_equal(d->rows[6].status, ROW_ESTIMATED);
    assert_int_equal(d->rows[7].status, ROW_ESTIMATED);
    error_warnings_clear(&w);
    design_free(d);
    table_free(s);
    table_free(t);
    job_free(j);
}

static void test_design_score_without_input_column_is_error(void **state)
{
    (void)state;
    static const char *const cols[] = { "parcel", "area" };
    static const char *const cells[] = { "S-201", "104.6" };
    job *j = parse_job("data t.csv\nscore s.csv\ntarget price\n"
                       "inputs area, bathrooms\nmodel linear\n");
    table *t = TABLE("t.csv", sales_cols, sales_cells);
    table *s = TABLE("s.csv", cols, cells);
    build_fails(j, t, s, JOB ":4", "unknown input 'bathrooms'",
                "s.csv has no such column");
    table_free(s);
    table_free(t);
    job_free(j);
}

/* The score table has no price (the houses are not sold yet), so a target
 * derived from price cannot and need not be computed there (this once
 * failed: every derive was resolved against the score table). */
static void test_design_derived_target_needs_no_score_column(void **state)
{
    (void)state;
    static const char *const cols[] = { "year_built", "area" };
    static const char *const cells[] = { "1991", "104.6", "2009", "92.35" };
    job *j = parse_job(DER_JOB "score s.csv\n");
    table *t = TABLE("t.csv", der_cols, der_cells);
    table *s = TABLE("s.csv", cols, cells);
    design *d = build_ok(j, t, s, NULL);
    assert_int_equal(d->n_rows, 9);
    assert_int_equal(d->rows[7].status, ROW_ESTIMATED);
    assert_int_equal(d->rows[8].status, ROW_ESTIMATED);
    design_free(d);
    table_free(s);
    table_free(t);
    job_free(j);
}

static void test_design_free_accepts_null(void **state)
{
    (void)state;
    design_free(NULL);
}

/* ---- yes/no targets (model logistic) ----------------------------------
 * The job parser still refuses `model logistic` (the model is not wired
 * yet), so these tests parse a linear job and switch its model. */

static const char *const yn_cols[] = { "score", "done" };

static job *logistic_job(const char *positive)
{
    job *j = parse_job("data t.csv\ntarget done\ninputs score\n"
                       "model linear\n");
    j->model = MODEL_LOGISTIC;
    if (positive) {
        j->positive = strdup(positive);
        j->positive_line = 4;
    }
    return j;
}

static void test_design_yes_no_target_codes_yes_as_one(void **state)
{
    (void)state;
    static const char *const cells[] = {
        "61.5", "Yes", "48.25", "no", "72.0", "YES", "55.75", "No",
        "66.0", "",          /* unknown: estimated */
    };
    job *j = logistic_job(NULL);
    table *t = TABLE("t.csv", yn_cols, cells);
    design *d = build_ok(j, t, NULL, NULL);
    assert_true(d->binary);
    assert_string_equal(d->positive, "yes");
    assert_string_equal(d->negative, "no");
    assert_int_equal(d->n_positive, 2);
    assert_int_equal(d->n_negative, 2);
    assert_int_equal(d->n_fit, 4);
    assert_true(d->y[0] == 1 && d->y[1] == 0 && d->y[2] == 1 && d->y[3] == 0);
    assert_int_equal(d->rows[4].status, ROW_ESTIMATED);
    design_free(d);
    table_free(t);
    job_free(j);
}

static void test_design_zero_one_target_and_named_positive(void **state)
{
    (void)state;
    static const char *const nums[] = {
        "61.5", "1", "48.25", "0", "72.0", "1", "55.75", "0",
    };
    job *j = logistic_job(NULL);
    table *t = TABLE("t.csv", yn_cols, nums);
    design *d = build_ok(j, t, NULL, NULL);
    assert_string_equal(d->positive, "1");
    assert_true(d->y[0] == 1 && d->y[1] == 0);
    design_free(d);
    job_free(j);
    /* the event can be either class: positive 0 makes 0 the event */
    j = logistic_job("0");
    d = build_ok(j, t, NULL, NULL);
    assert_string_equal(d->positive, "0");
    assert_true(d->y[0] == 0 && d->y[1] == 1);
    design_free(d);
    table_free(t);
    job_free(j);

    static const char *const words[] = {
        "61.5", "completed", "48.25", "withdrew", "72.0", "completed",
        "55.75", "withdrew",
    };
    t = TABLE("t.csv", yn_cols, words);
    j = logistic_job(NULL);
    build_fails(j, t, NULL, "t.job:2", "say which is the event",
                "'completed' (2)");
    job_free(j);
    j = logistic_job("Completed");   /* matched ignoring case */
    d = build_ok(j, t, NULL, NULL);
    assert_string_equal(d->positive, "completed");
    assert_true(d->y[0] == 1 && d->y[1] == 0);
    design_free(d);
    job_free(j);
    j = logistic_job("graduated");
    build_fails(j, t, NULL, "t.job:4", "positive 'graduated' is not a value",
                "'withdrew' (2)");
    job_free(j);
    table_free(t);
}

static void test_design_yes_no_target_needs_exactly_two_values(void **state)
{
    (void)state;
    static const char *const three[] = {
        "61.5", "yes", "48.25", "no", "72.0", "maybe", "55.75", "no",
    };
    job *j = logistic_job(NULL);
    table *t = TABLE("t.csv", yn_cols, three);
    build_fails(j, t, NULL, "t.job:2", "exactly two values",
                "'no' (2), 'yes' (1), 'maybe' (1)");  /* most frequent first */
    table_free(t);
    static const char *const one[] = {
        "61.5", "yes", "48.25", "yes", "72.0", "yes", "55.75", "yes",
    };
    t = TABLE("t.csv", yn_cols, one);
    build_fails(j, t, NULL, "t.job:2", "needs two values", "'yes' (4)");
    table_free(t);
    job_free(j);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_design_numeric_inputs_in_job_order),
        cmocka_unit_test(test_design_without_intercept_has_no_constant_term),
        cmocka_unit_test(test_design_category_reference_is_most_frequent_fitted),
        cmocka_unit_test(test_design_category_tie_takes_first_in_sort_order),
        cmocka_unit_test(test_design_numbers_as_category_levels),
        cmocka_unit_test(test_design_single_level_category_warns_and_adds_no_term),
        cmocka_unit_test(test_design_unusable_category_cells_are_skipped),
        cmocka_unit_test(test_design_unusable_cells_skip_row_with_reason),
        cmocka_unit_test(test_design_missing_stop_names_the_cell),
        cmocka_unit_test(test_design_too_few_rows_gives_first_reason),
        cmocka_unit_test(test_design_derive_chain_as_input_and_target),
        cmocka_unit_test(test_design_derived_target_through_chain_blank_is_estimated),
        cmocka_unit_test(test_design_missing_stop_on_failing_derive),
        cmocka_unit_test(test_design_derive_using_later_derive_is_error),
        cmocka_unit_test(test_design_derive_named_like_column_is_error),
        cmocka_unit_test(test_design_derive_defined_twice_is_error),
        cmocka_unit_test(test_design_derive_that_does_not_parse_is_error),
        cmocka_unit_test(test_design_derive_with_unknown_column_is_error),
        cmocka_unit_test(test_design_unknown_input_suggests_nearest),
        cmocka_unit_test(test_design_unknown_names_without_suggestion),
        cmocka_unit_test(test_design_target_listed_as_input_is_error),
        cmocka_unit_test(test_design_score_rows_follow_data_rows),
        cmocka_unit_test(test_design_score_without_id_column_warns),
        cmocka_unit_test(test_design_score_without_input_column_is_error),
        cmocka_unit_test(test_design_free_accepts_null),
        cmocka_unit_test(test_design_derived_target_needs_no_score_column),
        cmocka_unit_test(test_design_no_terms_at_all_is_error),
        cmocka_unit_test(test_design_yes_no_target_codes_yes_as_one),
        cmocka_unit_test(test_design_zero_one_target_and_named_positive),
        cmocka_unit_test(test_design_yes_no_target_needs_exactly_two_values),
        cmocka_unit_test(test_design_no_intercept_first_category_keeps_every_level),
    };
    return cmocka_run_group_tests_name("design", tests, NULL, NULL);
}
