/*
 * test_job.c: the job-file parser: every directive with its values and
 * line, comments, quotes, CRLF, byte-order mark, suggestions, paths, and
 * every error the parser can give. The corpus in tests/bad/ is checked
 * here too (each file's `# expect:` line), as far as the parser reaches.
 */
#include "testutil.h"

#include <dirent.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "../engine/job.h"

#define PATH "jobs/spring.job"
/* A valid job of four lines; a case appends its line 5. */
#define BASE "data sales.csv\ntarget price\ninputs area\nmodel linear\n"

static job *parse_ok(const char *text, const char *path)
{
    job *j = NULL;
    rf_error e = {0};
    rf_status s = job_parse(text, path, &j, &e);
    if (s != RF_OK)
        fail_msg("job_parse failed: %s: %s", e.where, e.message);
    assert_non_null(j);
    return j;
}

/* Parses text expecting RF_EINPUT at PATH:line with fragment in the
 * message; label names the case in a failure. */
static void expect_error(const char *label, const char *text, int line,
                         const char *fragment)
{
    job *j = (job *)&j;  /* must be reset to NULL by the parser */
    rf_error e = {0};
    char where[64];
    snprintf(where, sizeof where, "%s:%d", PATH, line);
    rf_status s = job_parse(text, PATH, &j, &e);
    if (s != RF_EINPUT || j != NULL || strcmp(e.where, where) != 0
        || strstr(e.message, fragment) == NULL)
        fail_msg("case '%s': got status %d at '%s': '%s'; expected '%s' "
                 "containing '%s'", label, (int)s, e.where, e.message,
                 where, fragment);
    assert_int_equal(e.status, RF_EINPUT);
}

typedef struct bad_case {
    const char *label;
    const char *text;
    int line;
    const char *fragment;
} bad_case;

static void run_cases(const bad_case *c, size_t n)
{
    for (size_t i = 0; i < n; i++)
        expect_error(c[i].label, c[i].text, c[i].line, c[i].fragment);
}

#define N(a) (sizeof(a) / sizeof((a)[0]))

/* ------------------------------------------------------- good jobs */

static void test_job_minimal_job_gets_defaults(void **state)
{
    (void)state;
    job *j = parse_ok(BASE, PATH);
    assert_string_equal(j->file, PATH);
    assert_string_equal(j->dir, "jobs");
    assert_string_equal(j->text, BASE);
    assert_string_equal(j->name, "spring");
    assert_int_equal(j->name_line, 0);
    assert_string_equal(j->data.path, "sales.csv");
    assert_string_equal(j->data.resolved, "jobs/sales.csv");
    assert_null(j->data.sheet);
    assert_int_equal(j->data.header, 0);
    assert_int_equal(j->data.delimiter, 0);
    assert_int_equal(j->data.line, 1);
    assert_null(j->score.path);
    assert_int_equal(j->score.line, 0);
    assert_string_equal(j->target.name, "price");
    assert_int_equal(j->target.line, 2);
    assert_int_equal(j->n_inputs, 1);
    assert_string_equal(j->inputs[0].name, "area");
    assert_int_equal(j->inputs[0].line, 3);
    assert_int_equal(j->n_categories, 0);
    assert_int_equal(j->n_derives, 0);
    assert_null(j->id.name);
    assert_null(j->output);
    assert_string_equal(j->output_resolved, "jobs/spring-results.xlsx");
    assert_int_equal(j->model, MODEL_LINEAR);
    assert_int_equal(j->model_line, 4);
    assert_int_equal(j->missing, MISSING_SKIP);
    assert_int_equal(j->intercept, 1);
    assert_close(j->ridge, 0.0, 0, 0);
    assert_int_equal(j->ridge_auto, 0);
    assert_null(j->positive);
    assert_close(j->threshold, 0.5, 0, 0);
    assert_close(j->level, 0.95, 0, 0);
    assert_int_equal(j->folds, -1);
    assert_int_equal(j->seed, 1);
    assert_int_equal(j->n_hidden, 0);
    assert_int_equal(j->solver, SOLVER_DEFAULT);
    assert_int_equal(j->restarts, 1);
    assert_int_equal(j->n_reports, 0);
    job_free(j);
}

static void test_job_parses_every_available_directive(void **state)
{
    (void)state;
    const char *text =
        "job county-2024\n"                                        /* 1 */
        "data \"closed sales.xlsx\" sheet \"Closed sales\" header 3\n"
        "score listed.csv delimiter semicolon header 2\n"          /* 3 */
        "target \"sale price\"\n"
        "inputs area, rooms\n"                                     /* 5 */
        "categories district\n"
        "derive age = 2024 - \"year built\"\n"                     /* 7 */
        "inputs age\n"
        "model linear\n"                                           /* 9 */
        "id parcel\n"
        "output out/county.xlsx\n"                                 /* 11 */
        "missing stop\n"
        "intercept no\n"                                           /* 13 */
        "ridge 0\n"
        "level 0.9\n"                                              /* 15 */
        "folds 0\n"
        "seed 4294967295\n"                                        /* 17 */
        "solver exact\n";
    job *j = parse_ok(text, PATH);
    assert_string_equal(j->name, "county-2024");
    assert_int_equal(j->name_line, 1);
    assert_string_equal(j->data.path, "closed sales.xlsx");
    assert_string_equal(j->data.resolved, "jobs/closed sales.xlsx");
    assert_string_equal(j->data.sheet, "Closed sales");
    assert_int_equal(j->data.header, 3);
    assert_int_equal(j->data.line, 2);
    assert_string_equal(j->score.path, "listed.csv");
    assert_string_equal(j->score.resolved, "jobs/listed.csv");
    assert_int_equal(j->score.delimiter, ';');
    assert_int_equal(j->score.header, 2);
    assert_int_equal(j->score.line, 3);
    assert_string_equal(j->target.name, "sale price");
    assert_int_equal(j->target.line, 4);
    assert_int_equal(j->n_inputs, 3);
    assert_string_equal(j->inputs[0].name, "area");
    assert_string_equal(j->inputs[1].name, "rooms");
    assert_string_equal(j->inputs[2].name, "age");
    assert_int_equal(j->inputs[1].line, 5);
    assert_int_equal(j->inputs[2].line, 8);
    assert_int_equal(j->n_categories, 1);
    assert_string_equal(j->categories[0].name, "district");
    assert_int_equal(j->categories[0].line, 6);
    assert_int_equal(j->n_derives, 1);
    assert_string_equal(j->derives[0].name, "age");
    assert_string_equal(j->derives[0].formula, "2024 - \"year built\"");
    assert_int_equal(j->derives[0].line, 7);
    assert_int_equal(j->model, MODEL_LINEAR);
    assert_int_equal(j->model_line, 9);
    assert_string_equal(j->id.name, "parcel");
    assert_int_equal(j->id.line, 10);
    assert_string_equal(j->output, "out/county.xlsx");
    assert_string_equal(j->output_resolved, "jobs/out/county.xlsx");
    assert_int_equal(j->output_line, 11);
    assert_int_equal(j->missing, MISSING_STOP);
    assert_int_equal(j->intercept, 0);
    assert_close(j->ridge, 0.0, 0, 0);
    assert_int_equal(j->ridge_line, 14);
    assert_close(j->level, 0.9, 0, 0);
    assert_int_equal(j->level_line, 15);
    assert_int_equal(j->folds, 0);
    assert_int_equal(j->folds_line, 16);
    assert_true(j->seed == 4294967295UL);
    assert_int_equal(j->solver, SOLVER_EXACT);
    assert_int_equal(j->solver_line, 18);
    job_free(j);
}

static void test_job_default_output_follows_job_name(void **state)
{
    (void)state;
    job *j = parse_ok("job autumn\n" BASE, PATH);
    assert_string_equal(j->output_resolved, "jobs/autumn-results.xlsx");
    job_free(j);
}

static void test_job_keywords_and_words_ignore_case(void **state)
{
    (void)state;
    const char *text =
        "DATA sales.csv SHEET 2 HEADER 4 DELIMITER TAB\n"
        "Target price\n"
        "INPUTS area\n"
        "Model LINEAR\n"
        "MISSING Stop\n"
        "Intercept YES\n"
        "RIDGE 0\n"
        "Solver EXACT\n";
    job *j = parse_ok(text, PATH);
    assert_string_equal(j->data.sheet, "2");
    assert_int_equal(j->data.header, 4);
    assert_int_equal(j->data.delimiter, '\t');
    assert_int_equal(j->model, MODEL_LINEAR);
    assert_int_equal(j->missing, MISSING_STOP);
    assert_int_equal(j->intercept, 1);
    assert_int_equal(j->solver, SOLVER_EXACT);
    /* names keep their case: they are matched against columns later */
    assert_string_equal(j->target.name, "price");
    job_free(j);
}

static void test_job_delimiter_forms(void **state)
{
    (void)state;
    static const struct { const char *arg; char want; } cases[] = {
        {"comma", ','}, {"Semicolon", ';'}, {"tab", '\t'}, {",", ','},
        {";", ';'}, {"\"\\t\"", '\t'}, {"|", '|'}, {"\"|\"", '|'},
        {"\"\t\"", '\t'},
    };
    for (size_t i = 0; i < N(cases); i++) {
        char text[256];
        snprintf(text, sizeof text, "data s.csv delimiter %s\n"
                 "target price\ninputs area\nmodel linear\n", cases[i].arg);
        job *j = parse_ok(text, PATH);
        if (j->data.delimiter != cases[i].want)
            fail_msg("delimiter %s gave %d", cases[i].arg, j->data.delimiter);
        job_free(j);
    }
}

static void test_job_comments_are_cut_outside_quotes(void **state)
{
    (void)state;
    const char *text =
        "# the spring job for the county\n"
        "   # indented comment\n"
        "\n"
        "data \"sales #2.csv\"   # the second extract\n"
        "target price#no space before the comment\n"
        "inputs \"rooms # all\", area # trailing\n"
        "derive label = IF(area > 100, 'big #1', \"x#y\") # comment\n"
        "derive plain = area*2#comment\n"
        "model linear\n";
    job *j = parse_ok(text, PATH);
    assert_string_equal(j->data.path, "sales #2.csv");
    assert_int_equal(j->data.line, 4);
    assert_string_equal(j->target.name, "price");
    assert_int_equal(j->n_inputs, 2);
    assert_string_equal(j->inputs[0].name, "rooms # all");
    assert_string_equal(j->inputs[1].name, "area");
    assert_string_equal(j->derives[0].formula,
                        "IF(area > 100, 'big #1', \"x#y\")");
    assert_string_equal(j->derives[1].formula, "area*2");
    job_free(j);
}

static void test_job_quotes_hold_spaces_punctuation_and_doubled_quotes(
    void **state)
{
    (void)state;
    const char *text =
        "data sales.csv\n"
        "target \"price, final\"\n"
        "inputs \"living area\",\"size \"\"m2\"\"\" , rooms\n"
        "categories \"district/ward\"\n"
        "derive \"price per m2\" = \"price, final\" / \"living area\"\n"
        "derive ratio=area/rooms\n"
        "model linear\n";
    job *j = parse_ok(text, PATH);
    assert_string_equal(j->target.name, "price, final");
    assert_int_equal(j->n_inputs, 3);
    assert_string_equal(j->inputs[0].name, "living area");
    assert_string_equal(j->inputs[1].name, "size \"m2\"");
    assert_string_equal(j->inputs[2].name, "rooms");
    assert_string_equal(j->categories[0].name, "district/ward");
    assert_string_equal(j->derives[0].name, "price per m2");
    assert_string_equal(j->derives[0].formula,
                        "\"price, final\" / \"living area\"");
    assert_string_equal(j->derives[1].name, "ratio");
    assert_string_equal(j->derives[1].formula, "area/rooms");
    job_free(j);
}

static void test_job_reads_crlf_lines(void **state)
{
    (void)state;
    const char *text = "data sales.csv\r\ntarget price\r\n"
                       "derive d = area / 2\r\n"
                       "inputs area, rooms\r\nmodel linear\r\nlevel 0.9\r\n";
    job *j = parse_ok(text, PATH);
    assert_string_equal(j->data.path, "sales.csv");
    assert_string_equal(j->target.name, "price");
    assert_string_equal(j->inputs[1].name, "rooms");
    assert_string_equal(j->derives[0].formula, "area / 2");
    assert_close(j->level, 0.9, 0, 0);
    assert_int_equal(j->level_line, 6);
    job_free(j);
    /* and errors still name the right line */
    expect_error("crlf", "data sales.csv\r\ntarget price\r\ninputs area\r\n"
                 "model linear\r\nlevel 2\r\n", 5, "level must be between");
}

static void test_job_ignores_byte_order_mark(void **state)
{
    (void)state;
    job *j = parse_ok("\xEF\xBB\xBF" BASE, PATH);
    assert_string_equal(j->data.path, "sales.csv");
    assert_int_equal(j->data.line, 1);
    assert_string_equal(j->text, BASE);  /* the Job sheet gets no BOM */
    job_free(j);
}

static void test_job_accepts_last_line_without_newline(void **state)
{
    (void)state;
    job *j = parse_ok("data sales.csv\ntarget price\ninputs area\n"
                      "model linear", PATH);
    assert_int_equal(j->model_line, 4);
    job_free(j);
}

static void test_job_resolves_paths_against_job_folder(void **state)
{
    (void)state;
    job *j = parse_ok(BASE, "spring.job");
    assert_string_equal(j->dir, ".");
    assert_string_equal(j->data.resolved, "sales.csv");
    assert_string_equal(j->output_resolved, "spring-results.xlsx");
    job_free(j);

    j = parse_ok(BASE "score ../listed/may.csv\noutput /tmp/r.xlsx\n",
                 "/srv/county/jobs/spring.job");
    assert_string_equal(j->dir, "/srv/county/jobs");
    assert_string_equal(j->data.resolved, "/srv/county/jobs/sales.csv");
    assert_string_equal(j->score.resolved,
                        "/srv/county/jobs/../listed/may.csv");
    assert_string_equal(j->output, "/tmp/r.xlsx");
    assert_string_equal(j->output_resolved, "/tmp/r.xlsx");
    job_free(j);

    j = parse_ok("data /data/sales.csv\ntarget price\ninputs area\n"
                 "model linear\n", "/spring.job");
    assert_string_equal(j->dir, "/");
    assert_string_equal(j->data.resolved, "/data/sales.csv");
    assert_string_equal(j->output_resolved, "/spring-results.xlsx");
    job_free(j);

    /* base name without the last extension; a dotless name stays whole */
    j = parse_ok(BASE, "jobs/2024.spring.job");
    assert_string_equal(j->name, "2024.spring");
    job_free(j);
    j = parse_ok(BASE, "jobs/spring");
    assert_string_equal(j->name, "spring");
    job_free(j);
}

static void test_job_repeated_inputs_accumulate_in_order(void **state)
{
    (void)state;
    job *j = parse_ok("data s.csv\ntarget price\ninputs a, b\n"
                      "categories c\ninputs d\ncategories e, f\n"
                      "model linear\n", PATH);
    assert_int_equal(j->n_inputs, 3);
    assert_string_equal(j->inputs[2].name, "d");
    assert_int_equal(j->inputs[2].line, 5);
    assert_int_equal(j->n_categories, 3);
    assert_string_equal(j->categories[2].name, "f");
    assert_int_equal(j->categories[2].line, 6);
    job_free(j);
}

static void test_job_categories_alone_are_enough(void **state)
{
    (void)state;
    job *j = parse_ok("data s.csv\ntarget price\ncategories district\n"
                      "model linear\n", PATH);
    assert_int_equal(j->n_inputs, 0);
    assert_int_equal(j->n_categories, 1);
    job_free(j);
}

static void test_job_numbers_take_exponents_and_signs(void **state)
{
    (void)state;
    job *j = parse_ok(BASE "level 9.5e-1\nridge +0.0\nseed 0\n", PATH);
    assert_close(j->level, 0.95, 1e-15, 0);
    assert_close(j->ridge, 0.0, 0, 0);
    assert_int_equal(j->seed, 0);
    job_free(j);
    j = parse_ok(BASE "level .5\n", PATH);
    assert_close(j->level, 0.5, 0, 0);
    job_free(j);
}

static void test_job_model_names(void **state)
{
    (void)state;
    assert_string_equal(job_model_name(MODEL_LINEAR), "linear");
    assert_string_equal(job_model_name(MODEL_LOGISTIC), "logistic");
    assert_string_equal(job_model_name(MODEL_NETWORK), "network");
    assert_string_equal(job_model_name(MODEL_NONE), "none");
}

static void test_job_free_accepts_null(void **state)
{
    (void)state;
    job_free(NULL);
}

/* ------------------------------------------------------- job_nearest */

static void test_job_nearest_suggests_plausible_typos(void **state)
{
    (void)state;
    static const char *const kw[] = {"job", "data", "target", "inputs",
                                     "categories", "seed", "model", "level"};
    assert_string_equal(job_nearest("targt", kw, N(kw)), "target");
    assert_string_equal(job_nearest("taregt", kw, N(kw)), "target");
    assert_string_equal(job_nearest("TARGT", kw, N(kw)), "target");
    assert_string_equal(job_nearest("input", kw, N(kw)), "inputs");
    assert_string_equal(job_nearest("category", kw, N(kw)), "categories");
    assert_string_equal(job_nearest("Data", kw, N(kw)), "data");
    assert_string_equal(job_nearest("sed", kw, N(kw)), "seed");
    /* limit max(1, 6/3) = 2 for "target": 2 edits pass, 3 do not */
    assert_string_equal(job_nearest("tarxxt", kw, N(kw)), "target");
    assert_null(job_nearest("txrxxt", kw, N(kw)));
    assert_null(job_nearest("xyz", kw, N(kw)));
    assert_null(job_nearest("", kw, N(kw)));
    assert_null(job_nearest(NULL, kw, N(kw)));
    assert_null(job_nearest("targt", kw, 0));
}

static void test_job_nearest_prefers_closest_then_first(void **state)
{
    (void)state;
    static const char *const c[] = {"rooms", "room", "rooms2"};
    assert_string_equal(job_nearest("roomz", c, N(c)), "rooms");
    static const char *const tie[] = {"bath", "bats"};
    assert_string_equal(job_nearest("batx", tie, N(tie)), "bath");
    static const char *const withnull[] = {NULL, "area"};
    assert_string_equal(job_nearest("aera", withnull, N(withnull)), "area");
}

static void test_job_nearest_skips_overlong_names(void **state)
{
    (void)state;
    char lng[80];
    memset(lng, 'a', sizeof lng - 1);
    lng[sizeof lng - 1] = '\0';
    const char *c[] = {lng};
    assert_null(job_nearest(lng, c, 1));
    const char *d[] = {"aaaa"};
    assert_null(job_nearest(lng, d, 1));
}

/* ------------------------------------------------------- errors */

static void test_job_rejects_bad_lines(void **state)
{
    (void)state;
    static const bad_case c[] = {
        {"unknown keyword", BASE "targt price\n", 5,
         "unknown keyword 'targt' (did you mean 'target'?)"},
        {"unknown keyword without suggestion", BASE "flurb 3\n", 5,
         "unknown keyword 'flurb'"},
        {"line starts with a quote", BASE "\"target\" price\n", 5,
         "a line starts with a keyword"},
        {"line starts with a comma", BASE ", area\n", 5,
         "a line starts with a keyword"},
        {"invalid utf-8", BASE "inputs \"Fl\xE4" "che\"\n", 5,
         "not valid UTF-8 at column 11"},
        {"overlong utf-8", BASE "inputs \xC0\xAF\n", 5, "not valid UTF-8"},
        {"utf-8 surrogate", BASE "inputs \xED\xA0\x80\n", 5,
         "not valid UTF-8"},
        {"truncated utf-8", BASE "inputs \xE2\x82\n", 5, "not valid UTF-8"},
        {"unterminated double quote", BASE "inputs \"living area\n", 5,
         "unterminated double quote: the '\"' at column 8"},
        {"text after closing quote", BASE "inputs \"living\"area\n", 5,
         "text follows a closing double quote"},
        {"quote inside a word", BASE "inputs living\"area\"\n", 5,
         "a double quote inside a word"},
    };
    run_cases(c, N(c));
}

static void test_job_rejects_directive_given_twice(void **state)
{
    (void)state;
    static const char *const once[] = {
        "job a", "data x.csv", "score y.csv", "target price", "model linear",
        "id parcel", "output r.xlsx", "missing skip", "intercept yes",
        "ridge 0", "positive yes", "threshold 0.5", "level 0.9", "folds 0",
        "seed 3", "hidden 4", "solver exact", "rate 0.1", "epochs 10",
        "restarts 2",
    };
    for (size_t i = 0; i < N(once); i++) {
        char text[256], frag[64];
        snprintf(text, sizeof text, "%s\n" BASE "%s\n", once[i], once[i]);
        const char *sp = strchr(once[i], ' ');
        snprintf(frag, sizeof frag, "%.*s is given twice; the first is at "
                 "line 1", (int)(sp - once[i]), once[i]);
        /* BASE holds data, target and model: those repeat earlier */
        int line = strncmp(once[i], "data", 4) == 0 ? 2
                   : strncmp(once[i], "target", 6) == 0 ? 3
                   : strncmp(once[i], "model", 5) == 0 ? 5 : 6;
        expect_error(once[i], text, line, frag);
    }
}

static void test_job_rejects_bad_arguments(void **state)
{
    (void)state;
    static const bad_case c[] = {
        {"target without a name", BASE "id\n", 5, "id needs a column name"},
        {"target comma", BASE "id ,\n", 5, "id needs a column name, not ','"},
        {"two words", BASE "id parcel number\n", 5, "id takes one value"},
        {"empty quoted", BASE "id \"\"\n", 5, "\"\" is empty"},
        {"job name with slash", "job a/b\n" BASE, 1,
         "cannot contain '/' or '\\'"},
        {"job name with backslash", "job a\\b\n" BASE, 1,
         "cannot contain '/' or '\\'"},
        {"output not xlsx", BASE "output result.ods\n", 5,
         "output must name an .xlsx file, not 'result.ods'"},
        {"output only extension", BASE "output .xlsx\n", 5,
         "output must name an .xlsx file"},
        {"model unknown", "data s.csv\ntarget p\ninputs a\nmodel lineer\n", 4,
         "model must be linear, logistic or network, not 'lineer' "
         "(did you mean 'linear'?)"},
        {"model missing", "data s.csv\ntarget p\ninputs a\nmodel\n", 4,
         "model needs linear, logistic or network"},
        {"missing bad", BASE "missing ignore\n", 5,
         "missing must be skip or stop, not 'ignore'"},
        {"missing typo", BASE "missing skp\n", 5, "(did you mean 'skip'?)"},
        {"intercept bad", BASE "intercept maybe\n", 5,
         "intercept must be yes or no"},
        {"solver bad", BASE "solver newton\n", 5,
         "solver must be exact, gradient, lbfgs or adam"},
        {"ridge negative", BASE "ridge -1\n", 5, "ridge must be 0 or more"},
        {"ridge word", BASE "ridge lots\n", 5, "ridge needs a number"},
        {"level 1.5", BASE "level 1.5\n", 5,
         "level must be between 0 and 1 (both excluded), not 1.5"},
        {"level 0", BASE "level 0\n", 5, "level must be between 0 and 1"},
        {"level 1", BASE "level 1\n", 5, "level must be between 0 and 1"},
        {"level percent", BASE "level 95\n", 5, "0.95 for 95%"},
        {"level word", BASE "level high\n", 5,
         "level needs a number such as 0.95, not 'high'"},
        {"level decimal comma", BASE "level 0,9\n", 5,
         "the decimal mark is a point: write 0.9"},
        {"level two numbers", BASE "level 0.9 0.95\n", 5,
         "level takes one value"},
        {"level nan", BASE "level nan\n", 5, "level needs a number"},
        {"level hex", BASE "level 0x1p-1\n", 5, "level needs a number"},
        {"level bare exponent", BASE "level 1e\n", 5, "level needs a number"},
        {"level dot only", BASE "level .\n", 5, "level needs a number"},
        {"level overflow", BASE "level 1e999\n", 5, "level needs a number"},
        {"threshold 0", BASE "threshold 0\n", 5,
         "threshold must be between 0 and 1"},
        {"threshold 1", BASE "threshold 1\n", 5,
         "threshold must be between 0 and 1"},
        {"folds 1", BASE "folds 1\n", 5,
         "folds must be 0 (off) or from 2 to 1048576, not 1"},
        {"folds over limit", BASE "folds 1048577\n", 5,
         "folds 1048577 is too large (at most 1048576)"},
        {"folds fraction", BASE "folds 2.5\n", 5,
         "folds needs a whole number"},
        {"seed negative", BASE "seed -3\n", 5,
         "seed needs a whole number written with digits, not '-3'"},
        {"seed too large", BASE "seed 123456789012345678901234567890\n", 5,
         "is too large"},
        {"rate zero", BASE "rate 0\n", 5, "rate must be more than 0"},
        {"rate negative", BASE "rate -0.1\n", 5, "rate must be more than 0"},
        {"epochs zero", BASE "epochs 0\n", 5, "epochs must be 1 or more"},
        {"epochs huge", BASE "epochs 99999999999\n", 5, "is too large"},
        {"restarts zero", BASE "restarts 0\n", 5,
         "restarts must be from 1 to 100"},
        {"restarts over limit", BASE "restarts 101\n", 5,
         "restarts 101 is too large (at most 100)"},
        {"positive missing", BASE "positive\n", 5, "positive needs the target"},
    };
    run_cases(c, N(c));
}

static void test_job_rejects_bad_lists(void **state)
{
    (void)state;
    static const bad_case c[] = {
        {"inputs empty", BASE "inputs\n", 5,
         "inputs needs at least one column name"},
        {"inputs empty item", BASE "inputs a,,b\n", 5,
         "empty item in the list of inputs (two commas in a row)"},
        {"inputs leading comma", BASE "inputs ,a\n", 5,
         "a ',' before the first name"},
        {"inputs trailing comma", BASE "inputs a, b,\n", 5,
         "a ',' after the last name"},
        {"inputs no comma", BASE "inputs living area\n", 5,
         "'living' and 'area' need a ',' between them"},
        {"inputs empty quoted", BASE "inputs a, \"\"\n", 5,
         "empty name \"\" in the list of inputs"},
        {"categories empty item", BASE "categories a,,b\n", 5,
         "empty item in the list of categories"},
        {"listed twice on one line", BASE "inputs rooms, rooms\n", 5,
         "'rooms' is listed twice on this line"},
        {"listed twice across lines", BASE "inputs rooms\n"
         "categories district, rooms\n", 6,
         "'rooms' is listed twice (lines 5 and 6)"},
        {"listed twice with base", BASE "categories area\n", 5,
         "'area' is listed twice (lines 3 and 5)"},
        {"hidden empty", BASE "hidden\n", 5, "hidden needs the units"},
        {"hidden no comma", BASE "hidden 8 4\n", 5,
         "separate the layers with ','"},
        {"hidden leading comma", BASE "hidden ,8\n", 5, "empty item"},
        {"hidden trailing comma", BASE "hidden 8,\n", 5,
         "a ',' after the last"},
        {"hidden too many layers", BASE "hidden 8, 8, 8, 8, 8\n", 5,
         "at most 4 layers"},
        {"hidden zero units", BASE "hidden 0\n", 5,
         "a layer has 1 to 1000 units, not '0'"},
        {"hidden too many units", BASE "hidden 1001\n", 5,
         "a layer has 1 to 1000 units"},
        {"hidden word", BASE "hidden many\n", 5, "a layer has 1 to 1000"},
    };
    run_cases(c, N(c));
}

static void test_job_rejects_bad_table_directives(void **state)
{
    (void)state;
    static const char *const rest =
        "target price\ninputs area\nmodel linear\n";
    static const struct { const char *label, *line1, *fragment; } c[] = {
        {"no path", "data", "data needs a file path"},
        {"comma path", "data ,", "data needs a file path"},
        {"empty path", "data \"\"", "\"\" is empty"},
        {"comma after path", "data s.csv , sheet 2",
         "unexpected ',' after the data path"},
        {"unquoted path with space", "data spring sales.csv",
         "unexpected 'sales.csv' after the data path; put a path with "
         "spaces in double quotes, e.g. \"spring sales.csv\""},
        {"unknown option", "data s.csv sheat 2",
         "unknown data option 'sheat' (did you mean 'sheet'?)"},
        {"unknown option later", "data s.csv header 2 flavour x",
         "unknown data option 'flavour'"},
        {"option twice", "data s.csv header 2 header 3",
         "header given twice on this line"},
        {"option without value", "data s.csv sheet",
         "sheet needs a value"},
        {"option comma value", "data s.csv sheet ,",
         "sheet needs a value, not ','"},
        {"empty sheet", "data s.csv sheet \"\"",
         "sheet needs a sheet name or number"},
        {"sheet zero", "data s.csv sheet 0", "sheets are numbered from 1"},
        {"header zero", "data s.csv header 0",
         "header must be a row number from 1 to 1048576, not '0'"},
        {"header word", "data s.csv header top", "header must be a row"},
        {"header beyond sheet", "data s.csv header 1048577",
         "header must be a row"},
        {"delimiter word", "data s.csv delimiter pipe",
         "delimiter must be one character, or comma, semicolon or tab, "
         "not 'pipe'"},
        {"delimiter letter", "data s.csv delimiter x",
         "'x' cannot be a delimiter"},
        {"delimiter digit", "data s.csv delimiter 5",
         "'5' cannot be a delimiter"},
        {"delimiter point", "data s.csv delimiter .",
         "'.' cannot be a delimiter"},
        {"delimiter quote", "data s.csv delimiter \"\"\"\"",
         "cannot be a delimiter"},
        {"delimiter empty", "data s.csv delimiter \"\"",
         "delimiter must be one character"},
        {"delimiter missing", "data s.csv delimiter",
         "delimiter needs a value"},
        {"score too", "score s.csv header 0", "header must be a row"},
    };
    for (size_t i = 0; i < N(c); i++) {
        char text[512];
        const char *data = strncmp(c[i].line1, "score", 5) == 0
                           ? "data d.csv\n" : "";
        snprintf(text, sizeof text, "%s\n%s%s", c[i].line1, data, rest);
        expect_error(c[i].label, text, 1, c[i].fragment);
    }
}

static void test_job_rejects_bad_derives(void **state)
{
    (void)state;
    static const bad_case c[] = {
        {"no equals", BASE "derive ppr area / rooms\n", 5,
         "derive needs '=' between the name and the formula"},
        {"no name", BASE "derive = area / rooms\n", 5, "derive needs a name"},
        {"nothing", BASE "derive\n", 5, "derive needs a name"},
        {"comment only", BASE "derive # later\n", 5, "derive needs a name"},
        {"empty quoted name", BASE "derive \"\" = 1\n", 5,
         "\"\" is empty"},
        {"quote in name", BASE "derive per\"room\" = 1\n", 5,
         "a double quote inside the derive name"},
        {"unterminated name", BASE "derive \"per room = 1\n", 5,
         "unterminated double quote"},
        {"no formula", BASE "derive ppr =\n", 5,
         "derive 'ppr' has no formula after '='"},
        {"comment formula", BASE "derive ppr = # later\n", 5,
         "has no formula after '='"},
        {"unterminated text", BASE "derive t = IF(area > 1, 'big, 'small')\n",
         5, "unterminated single quote in the formula"},
        {"unterminated name in formula", BASE "derive t = \"living area\n",
         5, "unterminated double quote in the formula"},
        {"twice", BASE "derive ppr = area / rooms\nderive ppr = 1\n", 6,
         "derive 'ppr' is defined twice (lines 5 and 6)"},
    };
    run_cases(c, N(c));
}

static void test_job_rejects_bad_reports(void **state)
{
    (void)state;
    static const bad_case c[] = {
        {"no kind", BASE "report\n", 5, "report needs a kind"},
        {"unknown kind", BASE "report ratio-studdy\n", 5,
         "unknown report 'ratio-studdy' (did you mean 'ratio-study'?)"},
        {"ratio-study extra", BASE "report ratio-study now\n", 5,
         "report ratio-study takes nothing after it"},
        {"selection-rates without by", BASE "report selection-rates\n", 5,
         "write report selection-rates by COLUMN"},
        {"selection-rates wrong word", BASE
         "report selection-rates per district\n", 5,
         "write report selection-rates by COLUMN"},
        {"selection-rates two columns", BASE
         "report selection-rates by district ward\n", 5,
         "takes one column after 'by'"},
        {"twice", BASE "report ratio-study\nreport ratio-study\n", 6,
         "report ratio-study is asked for twice (lines 5 and 6)"},
    };
    run_cases(c, N(c));
}

static void test_job_requires_data_target_model_inputs(void **state)
{
    (void)state;
    static const bad_case c[] = {
        {"no data", "target p\ninputs a\nmodel linear\n", 3,
         "no data: add a line `data PATH`"},
        {"no target", "data s.csv\ninputs a\nmodel linear\n", 3,
         "no target: add a line `target COLUMN`"},
        {"no model", "data s.csv\ntarget p\ninputs a\n# end\n", 4,
         "no model: add a line `model linear`"},
        {"no inputs", "data s.csv\ntarget p\nmodel linear\n", 3,
         "no inputs: add a line `inputs COLUMN, ...`"},
        {"empty file", "", 1, "no data"},
        {"comments only", "# nothing yet\n\n", 2, "no data"},
        /* a job that is wrong and also asks for the unavailable: the
         * mistake comes first */
        {"missing before unavailable", "data s.csv\nmodel logistic\n"
         "inputs a\n", 3, "no target"},
    };
    run_cases(c, N(c));
}

static void test_job_rejects_directives_that_do_not_apply(void **state)
{
    (void)state;
    static const bad_case c[] = {
        {"hidden for linear", BASE "hidden 8\n", 5,
         "hidden applies to model network only"},
        {"restarts for linear", BASE "restarts 3\n", 5,
         "restarts applies to model network only"},
        {"positive for linear", BASE "positive yes\n", 5,
         "positive applies to yes/no targets: model logistic or network"},
        {"ridge auto on a network", "data s.csv\ntarget p\ninputs a\n"
         "model network\nridge auto\n", 5,
         "ridge auto applies to model linear or logistic: give a network a "
         "fixed weight decay, `ridge VALUE`"},
        {"threshold for linear", BASE "threshold 0.4\n", 5,
         "threshold applies to yes/no targets: model logistic or network"},
        {"lbfgs for linear", BASE "solver lbfgs\n", 5,
         "solver lbfgs applies to model network only"},
        {"adam for linear", BASE "solver adam\n", 5,
         "solver adam applies to model network only"},
        {"exact for network", "data s.csv\ntarget p\ninputs a\n"
         "model network\nsolver exact\n", 5,
         "solver exact applies to models linear and logistic only"},
        {"gradient for network", "data s.csv\ntarget p\ninputs a\n"
         "model network\nsolver gradient\n", 5,
         "solver gradient applies to models linear and logistic only"},
        {"rate for exact", BASE "rate 0.1\n", 5,
         "rate applies to solver gradient or model network only"},
        {"epochs for exact", BASE "epochs 100\n", 5,
         "epochs applies to solver gradient or model network only"},
    };
    run_cases(c, N(c));
}

static void test_job_rejects_features_not_available_yet(void **state)
{
    (void)state;
    static const bad_case c[] = {
        {"report ratio-study", BASE "report ratio-study\n", 5,
         "report ratio-study is not available yet"},
        {"report selection-rates", BASE
         "report selection-rates by district\n", 5,
         "report selection-rates is not available yet"},
    };
    run_cases(c, N(c));
}

/* The features of yes/no targets and of gradient descent parse into the
 * job (they were refused before the logistic model existed). */
static void test_job_accepts_logistic_and_gradient(void **state)
{
    (void)state;
    job *j = NULL;
    rf_error err;
    assert_int_equal(job_parse("data s.csv\ntarget done\ninputs a\n"
                               "model logistic\npositive \"Completed\"\n"
                               "threshold 0.3\nridge 0.5\nsolver gradient\n"
                               "rate 0.2\nepochs 900\n", "t.job", &j, &err),
                     RF_OK);
    assert_int_equal(j->model, MODEL_LOGISTIC);
    assert_string_equal(j->positive, "Completed");
    assert_true(j->threshold == 0.3);
    assert_true(j->ridge == 0.5);
    assert_int_equal(j->solver, SOLVER_GRADIENT);
    assert_true(j->rate == 0.2);
    assert_int_equal(j->epochs, 900);
    job_free(j);
    assert_int_equal(job_parse(BASE "solver gradient\nridge 2\n", "t.job",
                               &j, &err), RF_OK);
    assert_int_equal(j->model, MODEL_LINEAR);
    assert_true(j->ridge == 2);
    job_free(j);
}

/* ------------------------------------------------------- job_read */

static char *write_temp(const char *bytes, size_t n)
{
    char *path = strdup("/tmp/rowfit-test-job-XXXXXX");
    assert_non_null(path);
    int fd = mkstemp(path);
    assert_true(fd >= 0);
    FILE *f = fdopen(fd, "wb");
    assert_non_null(f);
    assert_int_equal(fwrite(bytes, 1, n, f), n);
    assert_int_equal(fclose(f), 0);
    return path;
}

static void test_job_read_reads_a_file(void **state)
{
    (void)state;
    const char text[] = "\xEF\xBB\xBF" "data sales.csv\r\ntarget price\r\n"
                        "inputs area\r\nmodel linear\r\n";
    char *path = write_temp(text, sizeof text - 1);
    job *j = NULL;
    rf_error e = {0};
    assert_int_equal(job_read(path, &j, &e), RF_OK);
    assert_string_equal(j->file, path);
    assert_string_equal(j->dir, "/tmp");
    assert_string_equal(j->data.resolved, "/tmp/sales.csv");
    char want[128];  /* the temp name has no extension to strip */
    snprintf(want, sizeof want, "%s-results.xlsx", path);
    assert_string_equal(j->output_resolved, want);
    assert_string_equal(j->target.name, "price");
    job_free(j);
    unlink(path);
    free(path);
}

/* A job file that is not there is the user's mistake: exit 1, not 3. */
static void test_job_read_missing_file_is_input_error(void **state)
{
    (void)state;
    job *j = (job *)&j;
    rf_error e = {0};
    assert_int_equal(job_read("/nonexistent/rowfit/spring.job", &j, &e),
                     RF_EINPUT);
    assert_null(j);
    assert_string_equal(e.where, "/nonexistent/rowfit/spring.job");
    assert_non_null(strstr(e.message, "no such job file"));
}

static void test_job_read_directory_is_input_error(void **state)
{
    (void)state;
    job *j = NULL;
    rf_error e = {0};
    assert_int_equal(job_read("/tmp", &j, &e), RF_EINPUT);
    assert_null(j);
    assert_non_null(strstr(e.message, "is a folder, not a job file"));
}

static void test_job_read_rejects_nul_byte(void **state)
{
    (void)state;
    const char text[] = "data s.csv\ntarget p\ninp\0uts a\nmodel linear\n";
    char *path = write_temp(text, sizeof text - 1);
    job *j = NULL;
    rf_error e = {0};
    assert_int_equal(job_read(path, &j, &e), RF_EINPUT);
    assert_null(j);
    char where[128];
    snprintf(where, sizeof where, "%s:3", path);
    assert_string_equal(e.where, where);
    assert_non_null(strstr(e.message, "NUL byte"));
    unlink(path);
    free(path);
}

static void test_job_read_rejects_oversized_file(void **state)
{
    (void)state;
    size_t n = (size_t)JOB_FILE_MAX + 1;
    char *big = malloc(n);
    assert_non_null(big);
    memset(big, '#', n);
    char *path = write_temp(big, n);
    free(big);
    job *j = NULL;
    rf_error e = {0};
    assert_int_equal(job_read(path, &j, &e), RF_EINPUT);
    assert_null(j);
    assert_non_null(strstr(e.message, "not a job file"));
    unlink(path);
    free(path);
}

/* ------------------------------------------------------- corpus */

/* tests/bad/job-*.job: line 2 is `# expect: FRAGMENT`. The parser must
 * fail with the fragment at FILE:LINE, except where the mistake lies in
 * the data (the file does not exist), which the job parser does not see. */
static void test_job_bad_corpus_gives_expected_messages(void **state)
{
    (void)state;
    char dir[512];
    const char *file = __FILE__;
    const char *slash = strrchr(file, '/');
    snprintf(dir, sizeof dir, "%.*sbad", slash ? (int)(slash - file + 1) : 0,
             file);
    DIR *d = opendir(dir);
    if (d == NULL)
        skip();
    struct dirent *ent;
    int checked = 0;
    while ((ent = readdir(d)) != NULL) {
        size_t l = strlen(ent->d_name);
        if (strncmp(ent->d_name, "job-", 4) != 0 || l < 5
            || strcmp(ent->d_name + l - 4, ".job") != 0)
            continue;
        char path[1024], line[512], expect[512] = "";
        snprintf(path, sizeof path, "%s/%s", dir, ent->d_name);
        FILE *f = fopen(path, "r");
        assert_non_null(f);
        for (int k = 0; k < 2 && fgets(line, sizeof line, f); k++)
            if (strncmp(line, "# expect: ", 10) == 0) {
                snprintf(expect, sizeof expect, "%s", line + 10);
                expect[strcspn(expect, "\n")] = '\0';
            }
        fclose(f);
        if (expect[0] == '\0')
            fail_msg("%s has no '# expect:' second line", path);
        job *j = NULL;
        rf_error e = {0};
        rf_status s = job_read(path, &j, &e);
        if (s == RF_OK) {
            /* only a data problem may pass the parser */
            if (strstr(j->data.path, "no-such") == NULL)
                fail_msg("%s parsed without error", path);
            job_free(j);
            continue;
        }
        char prefix[1100];
        snprintf(prefix, sizeof prefix, "%s:", path);
        if (s != RF_EINPUT || strncmp(e.where, prefix, strlen(prefix)) != 0
            || strstr(e.message, expect) == NULL)
            fail_msg("%s: got '%s: %s', expected '%s'", path, e.where,
                     e.message, expect);
        checked++;
    }
    closedir(d);
    assert_true(checked >= 20);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_job_minimal_job_gets_defaults),
        cmocka_unit_test(test_job_parses_every_available_directive),
        cmocka_unit_test(test_job_default_output_follows_job_name),
        cmocka_unit_test(test_job_keywords_and_words_ignore_case),
        cmocka_unit_test(test_job_delimiter_forms),
        cmocka_unit_test(test_job_comments_are_cut_outside_quotes),
        cmocka_unit_test(
            test_job_quotes_hold_spaces_punctuation_and_doubled_quotes),
        cmocka_unit_test(test_job_reads_crlf_lines),
        cmocka_unit_test(test_job_ignores_byte_order_mark),
        cmocka_unit_test(test_job_accepts_last_line_without_newline),
        cmocka_unit_test(test_job_resolves_paths_against_job_folder),
        cmocka_unit_test(test_job_repeated_inputs_accumulate_in_order),
        cmocka_unit_test(test_job_categories_alone_are_enough),
        cmocka_unit_test(test_job_numbers_take_exponents_and_signs),
        cmocka_unit_test(test_job_model_names),
        cmocka_unit_test(test_job_free_accepts_null),
        cmocka_unit_test(test_job_nearest_suggests_plausible_typos),
        cmocka_unit_test(test_job_nearest_prefers_closest_then_first),
        cmocka_unit_test(test_job_nearest_skips_overlong_names),
        cmocka_unit_test(test_job_rejects_bad_lines),
        cmocka_unit_test(test_job_rejects_directive_given_twice),
        cmocka_unit_test(test_job_rejects_bad_arguments),
        cmocka_unit_test(test_job_rejects_bad_lists),
        cmocka_unit_test(test_job_rejects_bad_table_directives),
        cmocka_unit_test(test_job_rejects_bad_derives),
        cmocka_unit_test(test_job_rejects_bad_reports),
        cmocka_unit_test(test_job_requires_data_target_model_inputs),
        cmocka_unit_test(test_job_rejects_directives_that_do_not_apply),
        cmocka_unit_test(test_job_rejects_features_not_available_yet),
        cmocka_unit_test(test_job_accepts_logistic_and_gradient),
        cmocka_unit_test(test_job_read_reads_a_file),
        cmocka_unit_test(test_job_read_missing_file_is_input_error),
        cmocka_unit_test(test_job_read_directory_is_input_error),
        cmocka_unit_test(test_job_read_rejects_nul_byte),
        cmocka_unit_test(test_job_read_rejects_oversized_file),
        cmocka_unit_test(test_job_bad_corpus_gives_expected_messages),
    };
    return cmocka_run_group_tests_name("job", tests, NULL, NULL);
}
