/*
 * test_oom.c: allocation-failure injection, as SQLite and Lua test their
 * out-of-memory paths. For each target the Nth allocation fails, for
 * N = 1, 2, 3, ... until a run completes without reaching N; every run that
 * reached it must return RF_ENOMEM with the error filled, produce no
 * output object, never crash, and leave exactly as many blocks allocated as
 * it found (a per-run count, so a leak names its N even without
 * LeakSanitizer; under `make check SANITIZE=1` LeakSanitizer checks too).
 *
 * How: this binary is linked with the GNU linker's --wrap for malloc,
 * calloc, realloc, strdup, strndup and free, so every reference to them in
 * our own objects (io/, engine/ and this file) goes to the __wrap_
 * functions below (the __wrap_/__real_ names are the linker's convention).
 * Libraries (GSL, libxlsxwriter, FreeXL, minizip, expat, zlib, libc's own
 * fopen) call malloc through their own PLT and are NOT affected: that is
 * what we want, since their out-of-memory behaviour is theirs to test; we
 * test that our code handles every failure of its own allocations. The
 * Makefile rule:
 *
 *   OOM_WRAP := -Wl,--wrap=malloc,--wrap=calloc,--wrap=realloc,
 *               --wrap=strdup,--wrap=strndup,--wrap=free    (on one line)
 *   $(BUILD)/tests/test_oom: tests/test_oom.c tests/testutil.h $(LIB_OBJ)
 *           $(CC) $(CFLAGS) -o $@ $< $(LIB_OBJ) $(LDFLAGS) $(OOM_WRAP)
 *               $(LDLIBS) -lcmocka                           (on one line)
 *
 * Every injected failure must come back as RF_ENOMEM, with one exception:
 * a warning that cannot be stored is dropped and counted in the warnings'
 * `dropped` (io/error.h: losing a warning must not fail a good run), so a
 * run that returns RF_OK is accepted when it counted a dropped warning.
 * No failure may come back as RF_EINPUT or RF_ESYSTEM: an allocation
 * failing is never the input's or the system's fault.
 *
 * Not for: correctness of the results (the module tests do that); a
 * completed run is only checked enough to know it did the real work.
 */
#include "testutil.h"

#include <dirent.h>
#include <execinfo.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include <gsl/gsl_errno.h>

#include "../engine/classify.h"
#include "../engine/design.h"
#include "../engine/diagnose.h"
#include "../engine/formula.h"
#include "../engine/job.h"
#include "../engine/gradient.h"
#include "../engine/linear.h"
#include "../engine/logistic.h"
#include "../engine/network.h"
#include "../engine/peek.h"
#include "../engine/ridge.h"
#include "../engine/run.h"
#include "../engine/validate.h"
#include "../io/csv.h"
#include "../io/grid.h"
#include "../io/reader.h"
#include "../io/table.h"
#include "../io/xls.h"
#include "tabletest.h"

#define N(a) (sizeof(a) / sizeof((a)[0]))

/* A target with more allocation points than this is taken to loop. */
#define OOM_POINTS_MAX 200000L

/* ------------------------------------------------------------ injector */

/* The injector's state is the one global of the test: the wrappers are
 * called from the modules, which cannot be handed a context. */
static struct {
    long countdown;  /* 0: off; else the countdown-th allocation fails */
    long seen;       /* allocations since armed */
    int fired;       /* a failure was injected since armed */
    size_t absorbed; /* warnings the run dropped for want of memory */
    long live;       /* blocks from the wrapped calls not yet freed */
    void *stack[32]; /* where the injected failure happened */
    int depth;
} oom;

/* Weak, so that the binary still links when built by the generic test
 * rule without --wrap: __real_malloc is then NULL and every test skips
 * (oom_sweep) instead of the whole build failing. */
#define OOM_WEAK __attribute__((weak))
void *__real_malloc(size_t n) OOM_WEAK;
void *__real_calloc(size_t k, size_t n) OOM_WEAK;
void *__real_realloc(void *p, size_t n) OOM_WEAK;
char *__real_strdup(const char *s) OOM_WEAK;
char *__real_strndup(const char *s, size_t n) OOM_WEAK;
void __real_free(void *p) OOM_WEAK;

void *__wrap_malloc(size_t n);
void *__wrap_calloc(size_t k, size_t n);
void *__wrap_realloc(void *p, size_t n);
char *__wrap_strdup(const char *s);
char *__wrap_strndup(const char *s, size_t n);
void __wrap_free(void *p);

/* 1 when this allocation is the one to fail. Only one fails per run: after
 * it, allocations succeed again, so the test sees what the code does with
 * one failure (a cascade would hide a path that ignores the first). */
static int oom_hit(void)
{
    if (oom.countdown == 0)
        return 0;
    oom.seen++;
    if (oom.seen != oom.countdown)
        return 0;
    oom.fired = 1;
    /* glibc's backtrace allocates only inside libc, which is not wrapped */
    oom.depth = backtrace(oom.stack, (int)N(oom.stack));
    return 1;
}

void *__wrap_malloc(size_t n)
{
    if (oom_hit())
        return NULL;
    void *p = __real_malloc(n);
    if (p)
        oom.live++;
    return p;
}

void *__wrap_calloc(size_t k, size_t n)
{
    if (oom_hit())
        return NULL;
    void *p = __real_calloc(k, n);
    if (p)
        oom.live++;
    return p;
}

/* A failed realloc leaves the old block as it was (C11 7.22.3.5). */
void *__wrap_realloc(void *p, size_t n)
{
    if (oom_hit())
        return NULL;
    void *q = __real_realloc(p, n);
    if (q && p == NULL)
        oom.live++;
    return q;
}

char *__wrap_strdup(const char *s)
{
    if (oom_hit())
        return NULL;
    char *p = __real_strdup(s);
    if (p)
        oom.live++;
    return p;
}

char *__wrap_strndup(const char *s, size_t n)
{
    if (oom_hit())
        return NULL;
    char *p = __real_strndup(s, n);
    if (p)
        oom.live++;
    return p;
}

void __wrap_free(void *p)
{
    if (p)
        oom.live--;
    __real_free(p);
}

/* Mishandled failures listed in full before the test fails; past this
 * only counted. */
#define OOM_REPORT_MAX 12

/* Prints one mishandled failure with the stack of the injected failure, as
 * program+offset lines that `addr2line -f -i -e test_oom OFFSET` turns
 * into file:line. The sweep goes on, so one run lists every bad N. */
static void oom_report(const char *msg)
{
    print_error("%s\n  stack of the failed allocation:\n", msg);
    fflush(stdout);
    fflush(stderr);
    backtrace_symbols_fd(oom.stack, oom.depth, 2);
}

static void oom_arm(long n)
{
    oom.countdown = n;
    oom.seen = 0;
    oom.fired = 0;
    oom.absorbed = 0;
    oom.depth = 0;
}

/* A target passes its warnings here after the run: a dropped warning is
 * how an allocation failure inside error_warn is meant to end (the
 * targets' own warnings are far fewer than ERROR_WARNINGS_MAX, so every
 * dropped one was a failed allocation). */
static void oom_warnings(const rf_warnings *w)
{
    oom.absorbed += w->dropped;
}

/* Stops injecting; returns 1 when this run's failure was injected. */
static int oom_disarm(void)
{
    oom.countdown = 0;
    return oom.fired;
}

/* A target runs once with the injector armed: it makes its calls, calls
 * oom_disarm() as soon as the calls under test are done (so its own checks
 * and frees are never injected), frees everything it made, and returns the
 * first status that was not RF_OK (RF_OK when all succeeded). On RF_OK it
 * checks the result is real. err is the error of the failing call. */
typedef rf_status (*oom_target)(void *ctx, rf_error *err);

/* Runs target with the 1st, 2nd, ... allocation failing until a run
 * completes without reaching its N. Fails the test if any N was mishandled;
 * returns the number of allocation points (allocations of the complete
 * run). */
static long oom_sweep(const char *name, oom_target target, void *ctx)
{
    long bad = 0, absorbed = 0;
    if (__real_malloc == NULL || __real_free == NULL) {
        print_message("%s: skipped: test_oom was linked without "
                      "-Wl,--wrap=malloc,... (see the top of "
                      "tests/test_oom.c)\n", name);
        skip();
    }
    for (long n = 1; n <= OOM_POINTS_MAX; n++) {
        rf_error e;
        memset(&e, 0, sizeof e);
        long live = oom.live;
        oom_arm(n);
        rf_status st = target(ctx, &e);
        int fired = oom_disarm();
        if (!fired) {
            if (st != RF_OK || oom.live != live)
                fail_msg("%s: the run with no failure injected returned %s "
                         "(%s: %s) with %ld block(s) left", name,
                         error_status_str(st), e.where, e.message,
                         oom.live - live);
            if (bad > 0)
                fail_msg("%s: %ld of %ld allocation failures mishandled",
                         name, bad, n - 1);
            print_message("%s: %ld allocation points, each failure "
                          "reported (%ld as a dropped warning)\n", name,
                          n - 1, absorbed);
            return n - 1;
        }
        char msg[2 * ERROR_MESSAGE_MAX + ERROR_WHERE_MAX] = "";
        if (oom.live != live)
            snprintf(msg, sizeof msg, "%s: allocation %ld failing leaks %ld "
                     "block(s) (status %s: %s: %s)", name, n,
                     oom.live - live, error_status_str(st), e.where,
                     e.message);
        else if (st == RF_OK && oom.absorbed > 0)
            absorbed++;
        else if (st == RF_OK)
            snprintf(msg, sizeof msg, "%s: allocation %ld failed but the "
                     "run returned ok", name, n);
        else if (st != RF_ENOMEM)
            snprintf(msg, sizeof msg, "%s: allocation %ld failing gave %s "
                     "(%s: %s), not %s", name, n, error_status_str(st),
                     e.where, e.message, error_status_str(RF_ENOMEM));
        else if (e.status != st || e.message[0] == '\0')
            snprintf(msg, sizeof msg, "%s: allocation %ld failing returned "
                     "%s but the error record says %s: '%s'", name, n,
                     error_status_str(st), error_status_str(e.status),
                     e.message);
        if (msg[0] != '\0' && bad++ < OOM_REPORT_MAX)
            oom_report(msg);
    }
    fail_msg("%s: more than %ld allocation points: a loop?", name,
             OOM_POINTS_MAX);
    return 0;
}

/* ------------------------------------------------------------ fixtures */

/* A fresh folder under /tmp for files a target reads or writes. */
typedef struct folder {
    char dir[64];
    char files[8][160];
    size_t n;
} folder;

static void folder_make(folder *f)
{
    memset(f, 0, sizeof *f);
    snprintf(f->dir, sizeof f->dir, "/tmp/rowfit-oom-XXXXXX");
    assert_non_null(mkdtemp(f->dir));
}

static const char *folder_write(folder *f, const char *name, const char *text)
{
    assert_true(f->n < N(f->files));
    char *path = f->files[f->n++];
    size_t len = strlen(f->dir);
    assert_true(len + 1 + strlen(name) < sizeof f->files[0]);
    memcpy(path, f->dir, len);
    path[len] = '/';
    strcpy(path + len + 1, name);
    FILE *fp = fopen(path, "wb");
    assert_non_null(fp);
    assert_int_equal(fwrite(text, 1, strlen(text), fp), strlen(text));
    assert_int_equal(fclose(fp), 0);
    return path;
}

/* Entries in the folder (not . and ..). */
static int folder_count(const folder *f)
{
    DIR *d = opendir(f->dir);
    assert_non_null(d);
    int n = 0;
    struct dirent *de;
    while ((de = readdir(d)) != NULL)
        if (strcmp(de->d_name, ".") != 0 && strcmp(de->d_name, "..") != 0)
            n++;
    closedir(d);
    return n;
}

/* Removes every file in the folder, then the folder. */
static void folder_remove(folder *f)
{
    DIR *d = opendir(f->dir);
    assert_non_null(d);
    struct dirent *de;
    while ((de = readdir(d)) != NULL) {
        char path[512];
        if (strcmp(de->d_name, ".") == 0 || strcmp(de->d_name, "..") == 0)
            continue;
        snprintf(path, sizeof path, "%s/%s", f->dir, de->d_name);
        unlink(path);
    }
    closedir(d);
    rmdir(f->dir);
}

/* cmocka fixtures, so a failing test still frees and removes what it
 * made (LeakSanitizer would otherwise blame the test, not the module). */
static int folder_setup(void **state)
{
    folder *f = calloc(1, sizeof *f);
    if (f == NULL)
        return -1;
    folder_make(f);
    *state = f;
    return 0;
}

static int folder_teardown(void **state)
{
    folder_remove(*state);
    free(*state);
    return 0;
}

/* ------------------------------------------------------------ csv_read */

/* A byte-order mark, CRLF line ends, quoted fields with the delimiter, a
 * doubled quote and a line break inside, a date, a yes-no value, a blank,
 * a row shorter than the header (invented values). */
static const char csv_text[] =
    "\xEF\xBB\xBF" "id,\"living area\",district,sold,garage,note\r\n"
    "1,84.5,\"Oakmere, north\",2025-03-14,TRUE,\"said \"\"fine\"\"\"\r\n"
    "2,112.25,Fennick,2025-04-02,FALSE,\"two\nlines\"\r\n"
    "3,,Oakmere,2025-05-30,TRUE,\r\n"
    "4,97,\"Fennick\",2025-06-11,FALSE\r\n"
    "5,150.75,Oakmere,2024-12-01,TRUE,plain text\r\n";

typedef struct csv_ctx {
    const char *path;
    size_t rows, cols;  /* the shape a complete read must have */
} csv_ctx;

static rf_status run_csv(void *ctx, rf_error *err)
{
    const csv_ctx *c = ctx;
    csv_options opt = {0, 0};
    table *t = NULL;
    rf_warnings w = {0};
    rf_status st = csv_read(c->path, "sales.csv", &opt, &t, &w, err);
    oom_disarm();
    oom_warnings(&w);
    if (st != RF_OK) {
        assert_null(t);
    } else {
        assert_int_equal(table_cols(t), c->cols);
        assert_int_equal(table_rows(t), c->rows);
    }
    table_free(t);
    error_warnings_clear(&w);
    return st;
}

static void test_oom_csv_read_reports_every_failure(void **state)
{
    csv_ctx c = { folder_write(*state, "sales.csv", csv_text), 5, 6 };
    assert_true(oom_sweep("csv_read", run_csv, &c) > 0);
}

/* A file that makes every buffer grow: 70 columns (past the first field
 * and column capacities), 300 rows (past the first row capacity), a quoted
 * field of 70,000 bytes (past the record buffer and a text arena block);
 * with long_number, also an 80-digit number (past the number converter's
 * 64-byte stack buffer, io/csv.c convert_c_locale). */
#define BIG_COLS 70
#define BIG_ROWS 300
#define BIG_TEXT 70000

static void sweep_big_csv(void **state, int long_number, const char *name)
{
    size_t cap = (size_t)BIG_ROWS * BIG_COLS * 8 + BIG_TEXT + 4096;
    char *text = malloc(cap);
    assert_non_null(text);
    size_t n = 0;
    for (int c = 0; c < BIG_COLS; c++)
        n += (size_t)snprintf(text + n, cap - n, "%sc%d", c ? "," : "", c);
    text[n++] = '\n';
    for (int r = 0; r < BIG_ROWS; r++) {
        for (int c = 0; c < BIG_COLS; c++) {
            if (c)
                text[n++] = ',';
            if (r == 1 && c == 1) {
                text[n++] = '"';
                memset(text + n, 'x', BIG_TEXT);
                n += BIG_TEXT;
                text[n++] = '"';
            } else if (long_number && r == 2 && c == 2) {
                n += (size_t)snprintf(text + n, cap - n, "2.%078d", 385);
            } else {
                n += (size_t)snprintf(text + n, cap - n, "%d", r + c);
            }
        }
        text[n++] = '\n';
    }
    text[n] = '\0';
    csv_ctx c = { folder_write(*state, "big.csv", text), BIG_ROWS, BIG_COLS };
    free(text);
    assert_true(oom_sweep(name, run_csv, &c) > 0);
}

static void test_oom_csv_read_growing_buffers(void **state)
{
    sweep_big_csv(state, 0, "csv_read (growing buffers)");
}

/* An 80-digit number: its conversion once needed a malloc whose failure
 * turned the number into text (a wrong table, not an error). It now uses a
 * fixed buffer, so every failure here must be RF_ENOMEM. */
static void test_oom_csv_read_long_number(void **state)
{
    sweep_big_csv(state, 1, "csv_read (long number)");
}

/* ------------------------------------------------------------ job_parse */

/* Every directive this version accepts, each option of data and score,
 * quoted names, a BOM, a comment and CRLF (invented names). */
static const char job_text[] =
    "\xEF\xBB\xBF# every directive this version accepts\r\n"
    "job spring-round\r\n"
    "data \"closed sales.csv\" header 2 delimiter semicolon\r\n"
    "score listings.csv delimiter tab header 1\r\n"
    "target price\r\n"
    "derive age = 2026 - \"year built\"   # years\r\n"
    "derive big_lot = IF(lot_area > 800, 1, 0)\r\n"
    "inputs \"living area\", bedrooms, age\r\n"
    "inputs big_lot\r\n"
    "categories district, \"roof type\"\r\n"
    "id parcel\r\n"
    "output results/spring.xlsx\r\n"
    "model linear\r\n"
    "missing stop\r\n"
    "intercept no\r\n"
    "ridge 0\r\n"
    "level 0.9\r\n"
    "folds 0\r\n"
    "seed 12345\r\n"
    "solver exact\r\n";

static rf_status run_job_parse(void *ctx, rf_error *err)
{
    (void)ctx;
    job *j = NULL;
    rf_status st = job_parse(job_text, "jobs/spring.job", &j, err);
    oom_disarm();
    if (st != RF_OK) {
        assert_null(j);
    } else {
        assert_string_equal(j->name, "spring-round");
        assert_int_equal(j->n_inputs, 4);
        assert_int_equal(j->n_categories, 2);
        assert_int_equal(j->n_derives, 2);
        assert_string_equal(j->score.resolved, "jobs/listings.csv");
        assert_int_equal(j->missing, MISSING_STOP);
    }
    job_free(j);
    return st;
}

static void test_oom_job_parse_reports_every_failure(void **state)
{
    (void)state;
    assert_true(oom_sweep("job_parse", run_job_parse, NULL) > 0);
}

/* ------------------------------------------------------------ formula */

/* Functions, text in single quotes, comparison, power and a column name
 * that needs quotes. formula_eval must not allocate (formula.h: a row
 * costs no allocation), and formula_spreadsheet's NULL is its RF_ENOMEM. */
static const char formula_text[] =
    "IF(district = 'Oakmere', ROUND(SQRT(\"living area\") * 2.385, 2), "
    "MAX(LN(ABS(lot) + 1), LOG10(lot + 10), EXP(0.5))) "
    "+ YEAR(sold) - MONTH(sold) / DAY(sold) + MIN(lot, 3) ^ 2";

static rf_status run_formula(void *ctx, rf_error *err)
{
    (void)ctx;
    formula *f = NULL;
    char *sheet = NULL;
    rf_status st = formula_parse(formula_text, "t.job:3", &f, err);
    if (st == RF_OK) {
        fvalue refs[4];
        const char *cells[4] = { "C2", "D2", "E2", "F2" };
        assert_int_equal(formula_nrefs(f), 4);
        for (size_t i = 0; i < 4; i++) {
            const char *name = formula_ref(f, i);
            memset(&refs[i], 0, sizeof refs[i]);
            if (strcmp(name, "district") == 0) {
                refs[i].type = FV_TEXT;
                refs[i].text = "oakmere";
            } else if (strcmp(name, "sold") == 0) {
                refs[i].type = FV_NUMBER;
                refs[i].num = table_date_serial(2025, 3, 14);
            } else {
                refs[i].type = FV_NUMBER;
                refs[i].num = strcmp(name, "lot") == 0 ? 612.5L : 84.5L;
            }
        }
        fvalue out;
        char why[128] = "";
        long before = oom.seen;
        if (formula_eval(f, refs, &out, why, sizeof why) != 0)
            fail_msg("formula_eval: %s", why);
        assert_int_equal(oom.seen, before);  /* no allocation per row */
        assert_int_equal(out.type, FV_NUMBER);
        sheet = formula_spreadsheet(f, cells);
        if (sheet == NULL)
            st = error_nomem(err, "formula_spreadsheet");
    }
    oom_disarm();
    if (st != RF_OK)
        assert_null(sheet);
    else
        assert_non_null(strstr(sheet, "C2"));
    free(sheet);
    formula_free(f);
    return st;
}

static void test_oom_formula_reports_every_failure(void **state)
{
    (void)state;
    assert_true(oom_sweep("formula_parse+eval+spreadsheet", run_formula,
                          NULL) > 0);
}

/* ------------------------------------------------------------ design */

typedef struct design_ctx {
    job *j;
    table *data, *score;
} design_ctx;

static rf_status run_design(void *ctx, rf_error *err)
{
    design_ctx *c = ctx;
    design *d = NULL;
    rf_warnings w = {0};
    rf_status st = design_build(c->j, c->data, c->score, &d, &w, err);
    oom_disarm();
    oom_warnings(&w);
    if (st != RF_OK) {
        assert_null(d);
    } else {
        assert_int_equal(w.n + w.dropped, 2);
        /* intercept, area, age, district: 2 of 3 levels; roof: none */
        assert_int_equal(d->p, 5);
        /* the slate rows are skipped: a level unseen in the fit */
        assert_int_equal(d->n_est, 1);
        assert_int_equal(d->rows_skipped, 3);
    }
    design_free(d);
    error_warnings_clear(&w);
    return st;
}

static int design_setup(void **state)
{
    /* roof has one level in the fitted rows and listings has no id
     * column: both are warnings, whose allocations fail too */
    static const char *const names[] = { "id", "price", "area", "built",
                                         "district", "roof" };
    static const char *const cells[] = {
        "1", "210500", "84.5",   "1971", "Oakmere", "tile",
        "2", "265000", "112.25", "1994", "Fennick", "tile",
        "3", "199900", "77",     "1958", "Oakmere", "tile",
        "4", "",       "97",     "1980", "Hollin",  "slate",
        "5", "301250", "150.75", "2009", "Fennick", "tile",
        "6", "232000", "90.5",   "n/a",  "Oakmere", "tile",
        "7", "248700", "101",    "1988", "Hollin",  "tile",
        "8", "188000", "70.25",  "1963", "Oakmere", "tile",
    };
    static const char *const snames[] = { "area", "built", "district",
                                          "roof" };
    static const char *const scells[] = {
        "88",  "1975", "Fennick", "tile",
        "120", "2001", "Oakmere", "slate",
    };
    design_ctx *c = calloc(1, sizeof *c);
    rf_error e = {0};
    if (c == NULL)
        return -1;
    *state = c;
    c->data = tt_make_table("sales.csv", names, N(names), cells,
                            N(cells) / N(names));
    c->score = tt_make_table("listings.csv", snames, N(snames), scells,
                             N(scells) / N(snames));
    if (job_parse("data sales.csv\nscore listings.csv\ntarget price\n"
                  "derive age = 2026 - built\ninputs area, age\n"
                  "categories district, roof\nid id\nmodel linear\n",
                  "t.job", &c->j, &e) != RF_OK) {
        print_error("job_parse: %s: %s\n", e.where, e.message);
        return -1;
    }
    return 0;
}

static int design_teardown(void **state)
{
    design_ctx *c = *state;
    job_free(c->j);
    table_free(c->score);
    table_free(c->data);
    free(c);
    return 0;
}

static void test_oom_design_build_reports_every_failure(void **state)
{
    assert_true(oom_sweep("design_build", run_design, *state) > 0);
}

/* ------------------------------------------------------------ linear */

typedef struct linear_ctx {
    long double X[8 * 4], y[8];
} linear_ctx;

static rf_status run_linear(void *ctx, rf_error *err)
{
    const linear_ctx *c = ctx;
    linear_model *m = NULL;
    rf_status st = linear_fit(c->X, c->y, 8, 4, 1, 0.95, &m, err);
    oom_disarm();
    if (st != RF_OK) {
        assert_null(m);
    } else {
        assert_int_equal(m->rank, 3);
        assert_int_equal(m->drop[3], LINEAR_DROP_COLLINEAR);
    }
    linear_free(m);
    return st;
}

static void test_oom_linear_fit_reports_every_failure(void **state)
{
    (void)state;
    /* intercept, x1, x2 and x3 = x1 + x2: rank 3 (invented values) */
    static const double x1[8] = { 2.385, 1.5, 3.75, 4.125, 0.5, 2.0, 5.25,
                                  3.0 };
    static const double x2[8] = { 1.0, 4.5, 2.25, 0.75, 3.5, 5.0, 1.25,
                                  2.75 };
    linear_ctx c;
    for (size_t i = 0; i < 8; i++) {
        c.X[i * 4 + 0] = 1;
        c.X[i * 4 + 1] = x1[i];
        c.X[i * 4 + 2] = x2[i];
        c.X[i * 4 + 3] = (long double)x1[i] + x2[i];
        c.y[i] = 3.5L + 2.25L * x1[i] - 1.125L * x2[i]
                 + (i % 2 ? 0.125L : -0.125L);
    }
    assert_true(oom_sweep("linear_fit", run_linear, &c) > 0);
}

/* ------------------------------------------- logistic, gradient, classify */

/* Twelve invented applicants: an intercept, a score and a duplicate of it
 * (dropped), outcomes overlapping so the fit is finite. */
typedef struct yesno_ctx {
    long double X[12 * 3];
    double y[12];
} yesno_ctx;

static void yesno_fill(yesno_ctx *c)
{
    static const double score[12] = { 41.5, 55.25, 62.0, 48.75, 71.5, 58.0,
                                       66.25, 44.0, 79.5, 52.5, 69.0, 60.75 };
    static const double done[12] = { 0, 1, 1, 0, 1, 0, 1, 0, 1, 1, 0, 1 };
    for (size_t i = 0; i < 12; i++) {
        c->X[i * 3 + 0] = 1;
        c->X[i * 3 + 1] = score[i];
        c->X[i * 3 + 2] = 2.0L * score[i];
        c->y[i] = done[i];
    }
}

static rf_status run_logistic(void *ctx, rf_error *err)
{
    const yesno_ctx *c = ctx;
    logistic_model *m = NULL;
    rf_status st = logistic_fit(c->X, c->y, 12, 3, 1, 0.95, 0, &m, err);
    oom_disarm();
    if (st != RF_OK) {
        assert_null(m);
    } else {
        assert_int_equal(m->rank, 2);
        assert_true(m->converged);
    }
    logistic_free(m);
    return st;
}

static void test_oom_logistic_fit_reports_every_failure(void **state)
{
    (void)state;
    yesno_ctx c;
    yesno_fill(&c);
    assert_true(oom_sweep("logistic_fit", run_logistic, &c) > 0);
}

static rf_status run_gradient(void *ctx, rf_error *err)
{
    const yesno_ctx *c = ctx;
    gradient_model *m = NULL;
    /* the duplicate column is left out: gradient_fit does not test
     * collinearity (its callers pass the terms the exact fit kept) */
    long double X[12 * 2];
    for (size_t i = 0; i < 12; i++) {
        X[i * 2] = c->X[i * 3];
        X[i * 2 + 1] = c->X[i * 3 + 1];
    }
    rf_status st = gradient_fit(X, c->y, 12, 2, 1, 1, 0, 0, 0, &m, err);
    oom_disarm();
    if (st != RF_OK)
        assert_null(m);
    gradient_free(m);
    return st;
}

static void test_oom_gradient_fit_reports_every_failure(void **state)
{
    (void)state;
    yesno_ctx c;
    yesno_fill(&c);
    assert_true(oom_sweep("gradient_fit", run_gradient, &c) > 0);
}

/* The network on the same twelve applicants (the duplicate column kept:
 * a network has no rank to decide): two hidden layers, three rows
 * held out, two L-BFGS iterations and then two Adam epochs, then the
 * importance of each input. */
static rf_status run_network(void *ctx, rf_error *err)
{
    const yesno_ctx *c = ctx;
    network_options o;
    network_options_init(&o);
    o.classify = 1;
    o.n_hidden = 2;
    o.hidden[0] = 3;
    o.hidden[1] = 2;
    o.epochs = 2;
    o.holdout = 0.25;
    network_model *m = NULL, *a = NULL;
    const size_t first[2] = { 1, 2 }, len[2] = { 1, 1 };
    double imp[2];
    rf_status st = network_fit(c->X, c->y, 12, 3, &o, &m, err);
    if (st == RF_OK) {
        o.solver = NETWORK_ADAM;
        st = network_fit(c->X, c->y, 12, 3, &o, &a, err);
    }
    if (st == RF_OK)
        st = network_importance(m, c->X, c->y, 12, first, len, 2, 5, imp,
                                err);
    oom_disarm();
    if (st == RF_OK) {
        assert_int_equal(m->n_holdout, 3);
        assert_int_equal(a->epochs, 2);
    } else if (m == NULL) {
        assert_null(a);
    }
    network_free(m);
    network_free(a);
    return st;
}

static void test_oom_network_reports_every_failure(void **state)
{
    (void)state;
    yesno_ctx c;
    yesno_fill(&c);
    assert_true(oom_sweep("network_fit", run_network, &c) > 0);
}

/* ------------------------------------------------------------ ridge */

/* The linear context of linear_fit's sweep (x3 = x1 + x2 dropped by the
 * drops linear_fit gives), fitted at one penalty and as a path on a fold. */
typedef struct ridge_ctx {
    linear_ctx lin;
    linear_drop drop[4];
} ridge_ctx;

static rf_status run_ridge(void *ctx, rf_error *err)
{
    const ridge_ctx *c = ctx;
    double beta[4], pb[4];
    ridge_path *r = NULL;
    const size_t fold[6] = { 0, 1, 3, 4, 6, 7 };
    rf_status st = ridge_fit(c->lin.X, c->lin.y, 8, 4, 1, c->drop, 2.5, beta,
                             err);
    if (st == RF_OK)
        st = ridge_path_create(c->lin.X, c->lin.y, 8, 4, 1, c->drop, fold, 6,
                               &r, err);
    if (st == RF_OK)
        st = ridge_path_solve(r, 2.5, pb, err);
    oom_disarm();
    if (st == RF_OK) {
        assert_true(isnan(beta[3]) && isnan(pb[3]));
        assert_true(isfinite(beta[1]) && isfinite(pb[1]));
    } else {
        assert_null(r);   /* a failed create leaves no path */
    }
    ridge_path_free(r);
    return st;
}

static void test_oom_ridge_reports_every_failure(void **state)
{
    (void)state;
    static const double x1[8] = { 2.385, 1.5, 3.75, 4.125, 0.5, 2.0, 5.25,
                                  3.0 };
    static const double x2[8] = { 1.0, 4.5, 2.25, 0.75, 3.5, 5.0, 1.25,
                                  2.75 };
    ridge_ctx c;
    for (size_t i = 0; i < 8; i++) {
        c.lin.X[i * 4 + 0] = 1;
        c.lin.X[i * 4 + 1] = x1[i];
        c.lin.X[i * 4 + 2] = x2[i];
        c.lin.X[i * 4 + 3] = (long double)x1[i] + x2[i];
        c.lin.y[i] = 3.5L + 2.25L * x1[i] - 1.125L * x2[i]
                     + (i % 2 ? 0.125L : -0.125L);
    }
    for (size_t j = 0; j < 3; j++)
        c.drop[j] = LINEAR_KEPT;
    c.drop[3] = LINEAR_DROP_COLLINEAR;
    assert_true(oom_sweep("ridge_fit+ridge_path", run_ridge, &c) > 0);
}

static rf_status run_classify(void *ctx, rf_error *err)
{
    const yesno_ctx *c = ctx;
    double p[12];
    for (size_t i = 0; i < 12; i++)
        p[i] = (double)(c->X[i * 3 + 1] / 100.0L);
    classify_measures cm;
    rf_status st = classify_measure(c->y, p, 12, 0.5, &cm, err);
    oom_disarm();
    return st;
}

static void test_oom_classify_reports_every_failure(void **state)
{
    (void)state;
    yesno_ctx c;
    yesno_fill(&c);
    assert_true(oom_sweep("classify_measure", run_classify, &c) > 0);
}

/* ------------------------------------------------------------ validate */

/* The twelve applicants again: stratified folds, out-of-fold measures
 * (numeric and classify), the calibration table and the risk groups. */
static rf_status run_validate_folds(void *ctx, rf_error *err)
{
    const yesno_ctx *c = ctx;
    size_t fold[12];
    rf_status st = validate_folds(12, 3, 20250611UL, c->y, fold, err);
    oom_disarm();
    if (st == RF_OK)
        for (size_t i = 0; i < 12; i++)
            assert_true(fold[i] < 3);
    return st;
}

static rf_status run_validate_measure(void *ctx, rf_error *err)
{
    const yesno_ctx *c = ctx;
    double p[12];
    size_t fold[12];
    for (size_t i = 0; i < 12; i++) {
        p[i] = (double)(c->X[i * 3 + 1] / 100.0L);
        fold[i] = i % 3;
    }
    validate_result *num = NULL, *cls = NULL;
    rf_status st = validate_measure(c->y, p, fold, 12, 3, 0, 0.5, &num, err);
    if (st == RF_OK)
        st = validate_measure(c->y, p, fold, 12, 3, 1, 0.5, &cls, err);
    oom_disarm();
    if (st != RF_OK) {
        assert_null(cls);
    } else {
        assert_int_equal(num->k, 3);
        assert_int_equal(cls->all.n, 12);
    }
    validate_free(num);
    validate_free(cls);
    return st;
}

static rf_status run_validate_calibrate(void *ctx, rf_error *err)
{
    const yesno_ctx *c = ctx;
    double p[12];
    for (size_t i = 0; i < 12; i++)
        p[i] = (double)(c->X[i * 3 + 1] / 100.0L);
    validate_calibration *cal = NULL;
    size_t group[12], g = 0;
    rf_status st = validate_calibrate(c->y, p, 12, 4, &cal, err);
    if (st == RF_OK)
        st = classify_risk_groups(p, 12, 4, group, &g, err);
    oom_disarm();
    if (st == RF_OK) {
        assert_int_equal(cal->groups, 4);
        assert_int_equal(g, 4);
    } else if (cal == NULL) {
        assert_int_equal(g, 0);
    }
    validate_calibration_free(cal);
    return st;
}

static void test_oom_validate_reports_every_failure(void **state)
{
    (void)state;
    yesno_ctx c;
    yesno_fill(&c);
    assert_true(oom_sweep("validate_folds", run_validate_folds, &c) > 0);
    assert_true(oom_sweep("validate_measure", run_validate_measure, &c) > 0);
    assert_true(oom_sweep("validate_calibrate, classify_risk_groups",
                          run_validate_calibrate, &c) > 0);
}

/* ------------------------------------------------------------ diagnose */

/* The models are fitted before the sweep (their own failures are swept
 * above); the target is the diagnostics alone. */
typedef struct diagnose_ctx {
    const long double *X;
    const double *y;
    size_t n, p;
    linear_model *lin;
    logistic_model *logit;
} diagnose_ctx;

static rf_status run_diagnose_linear(void *ctx, rf_error *err)
{
    const diagnose_ctx *c = ctx;
    diagnose_result *d = NULL;
    rf_status st = diagnose_linear(c->lin, c->X, &d, err);
    oom_disarm();
    if (st != RF_OK) {
        assert_null(d);
    } else {
        assert_int_equal(d->n, c->n);
        assert_int_equal(d->p, c->lin->rank);
    }
    diagnose_free(d);
    return st;
}

static rf_status run_diagnose_logistic(void *ctx, rf_error *err)
{
    const diagnose_ctx *c = ctx;
    diagnose_result *d = NULL;
    rf_status st = diagnose_logistic(c->logit, c->X, c->y, &d, err);
    oom_disarm();
    if (st != RF_OK) {
        assert_null(d);
    } else {
        assert_int_equal(d->n, c->n);
        assert_non_null(d->pearson);
        assert_true(isfinite(d->leverage[0]));
    }
    diagnose_free(d);
    return st;
}

static rf_status run_diagnose_vif(void *ctx, rf_error *err)
{
    const diagnose_ctx *c = ctx;
    double vif[4];
    rf_status st = diagnose_vif(c->X, c->n, c->p, 1, c->lin->drop, vif, err);
    oom_disarm();
    if (st == RF_OK)  /* x1 and x2 kept, x3 = x1 + x2 dropped */
        assert_true(vif[1] >= 1 && vif[2] >= 1 && isnan(vif[3]));
    return st;
}

static void test_oom_diagnose_linear_and_vif(void **state)
{
    (void)state;
    /* the design of the linear_fit sweep (x3 = x1 + x2 is dropped) */
    static const double x1[8] = { 2.385, 1.5, 3.75, 4.125, 0.5, 2.0, 5.25,
                                  3.0 };
    static const double x2[8] = { 1.0, 4.5, 2.25, 0.75, 3.5, 5.0, 1.25,
                                  2.75 };
    linear_ctx lc;
    for (size_t i = 0; i < 8; i++) {
        lc.X[i * 4 + 0] = 1;
        lc.X[i * 4 + 1] = x1[i];
        lc.X[i * 4 + 2] = x2[i];
        lc.X[i * 4 + 3] = (long double)x1[i] + x2[i];
        lc.y[i] = 3.5L + 2.25L * x1[i] - 1.125L * x2[i]
                  + (i % 2 ? 0.125L : -0.125L);
    }
    diagnose_ctx c = { lc.X, NULL, 8, 4, NULL, NULL };
    rf_error e = {0};
    assert_int_equal(linear_fit(lc.X, lc.y, 8, 4, 1, 0.95, &c.lin, &e),
                     RF_OK);
    assert_true(oom_sweep("diagnose_linear", run_diagnose_linear, &c) > 0);
    assert_true(oom_sweep("diagnose_vif", run_diagnose_vif, &c) > 0);
    linear_free(c.lin);
}

static void test_oom_diagnose_logistic(void **state)
{
    (void)state;
    yesno_ctx yc;
    yesno_fill(&yc);
    diagnose_ctx c = { yc.X, yc.y, 12, 3, NULL, NULL };
    rf_error e = {0};
    assert_int_equal(logistic_fit(yc.X, yc.y, 12, 3, 1, 0.95, 0.5, &c.logit,
                                  &e), RF_OK);
    assert_true(oom_sweep("diagnose_logistic", run_diagnose_logistic, &c)
                > 0);
    logistic_free(c.logit);
}

/* ------------------------------------------------------------ run_job */

/* A whole job: read the job and two CSV files, a derive, a category, a
 * skipped row (year 'n/a'), a term dropped as collinear (twice = 2 * area,
 * so its warning is allocated too), the fit, the report and the workbook.
 * libxlsxwriter's own allocations are not injected (see the top); ours
 * around it are, including the writer's temporary-file name. */

typedef struct run_ctx {
    folder *f;
    const char *job;
    int files;  /* entries in the folder before a run */
    size_t fitted, estimated, skipped, terms;  /* of a run that works */
    const char *warning;  /* a warning it must give, or NULL */
} run_ctx;

static rf_status run_run(void *ctx, rf_error *err)
{
    run_ctx *c = ctx;
    run_options opt;
    run_result res;
    rf_warnings w = {0};
    memset(&opt, 0, sizeof opt);
    rf_status st = run_job(c->job, &opt, &w, &res, err);
    oom_disarm();
    oom_warnings(&w);
    size_t warned = 0;
    for (size_t i = 0; c->warning && i < w.n; i++)
        warned += strstr(w.items[i], c->warning) != NULL;
    warned += w.dropped;  /* it may be the warning that was dropped */
    error_warnings_clear(&w);
    if (st != RF_OK) {
        /* a failed run leaves no workbook and no temporary file */
        assert_int_equal(folder_count(c->f), c->files);
        return st;
    }
    assert_int_equal(folder_count(c->f), c->files + 1);
    assert_int_equal(res.rows_fitted, c->fitted);
    assert_int_equal(res.rows_estimated, c->estimated);
    assert_int_equal(res.rows_skipped, c->skipped);
    assert_int_equal(res.terms, c->terms);
    assert_true(c->warning == NULL || warned >= 1);
    unlink(res.written);
    return st;
}

static void test_oom_run_job_reports_every_failure(void **state)
{
    folder *f = *state;
    folder_write(f, "sales.csv",
                 "id,price,area,built,district\n"
                 "1,210500,84.5,1971,Oakmere\n"
                 "2,265000,112.25,1994,Fennick\n"
                 "3,199900,77,1958,Oakmere\n"
                 "4,,97,1980,Hollin\n"
                 "5,301250,150.75,2009,Fennick\n"
                 "6,232000,90.5,n/a,Oakmere\n"
                 "7,248700,101,1988,Hollin\n"
                 "8,188000,70.25,1963,Oakmere\n"
                 "9,277300,131.5,2003,Fennick\n");
    folder_write(f, "listings.csv",
                 "id;area;built;district\n20;88;1975;Fennick\n");
    run_ctx c = { f, NULL, 0, 7, 2, 1, 6, "'twice' was dropped" };
    c.job = folder_write(f, "tiny.job",
                         "job tiny\ndata sales.csv\n"
                         "score listings.csv delimiter semicolon\n"
                         "target price\nderive age = 2026 - built\n"
                         "derive twice = area * 2\n"
                         "inputs area, age, twice\ncategories district\n"
                         "id id\nmodel linear\nlevel 0.9\n");
    c.files = folder_count(f);
    assert_true(oom_sweep("run_job", run_run, &c) > 0);

    /* the same table through solver gradient */
    c.job = folder_write(f, "descent.job",
                         "job descent\ndata sales.csv\n"
                         "target price\ninputs area\n"
                         "categories district\nmodel linear\n"
                         "solver gradient\n");
    c.fitted = 8;
    c.estimated = 1;
    c.skipped = 0;
    c.terms = 4;
    c.warning = NULL;
    c.files = folder_count(f);
    assert_true(oom_sweep("run_job gradient", run_run, &c) > 0);
}

/* A logistic job, by both solvers: the class coding, the fit, the
 * classification measures, the probability and label formulas. */
static void test_oom_run_logistic_job_reports_every_failure(void **state)
{
    folder *f = *state;
    folder_write(f, "applied.csv",
                 "id,score,years,region,done\n"
                 "1,52,1,North,no\n2,71,4,South,yes\n3,64,2,North,no\n"
                 "4,58,5,South,yes\n5,80,3,North,yes\n6,47,0,South,no\n"
                 "7,69,2,North,no\n8,55,6,South,yes\n9,74,1,North,yes\n"
                 "10,50,3,South,no\n11,66,2,North,yes\n12,61,0,South,no\n"
                 "13,45,5,North,no\n14,77,4,South,yes\n15,,2,North,yes\n"
                 "16,68,3,South,\n");
    run_ctx c = { f, NULL, 0, 14, 1, 1, 4, "1 row skipped" };
    c.job = folder_write(f, "applied.job",
                         "job applied\ndata applied.csv\ntarget done\n"
                         "inputs score, years\ncategories region\n"
                         "model logistic\npositive yes\nthreshold 0.4\n"
                         "id id\n");
    c.files = folder_count(f);
    assert_true(oom_sweep("run_job logistic", run_run, &c) > 0);
    c.job = folder_write(f, "applied-gd.job",
                         "job applied-gd\ndata applied.csv\ntarget done\n"
                         "inputs score, years\ncategories region\n"
                         "model logistic\nsolver gradient\nridge 0.5\n");
    c.files = folder_count(f);
    assert_true(oom_sweep("run_job logistic gradient", run_run, &c) > 0);

    /* cross-validation: logistic fold refits at a fixed penalty (ridge
     * auto's nested choice, the same code for both models, is swept on
     * the linear job below, where it costs 40 times fewer allocations),
     * the ridge path, the Validation and Diagnostics sheets */
    c.job = folder_write(f, "applied-cv.job",
                         "job applied-cv\ndata applied.csv\ntarget done\n"
                         "inputs score, years\nmodel logistic\n"
                         "folds 3\nridge 0.5\n");
    c.terms = 3;
    c.files = folder_count(f);
    assert_true(oom_sweep("run_job logistic cv", run_run, &c) > 0);
    run_ctx l = { f, NULL, 0, 15, 1, 0, 3, NULL };
    l.job = folder_write(f, "score-cv.job",
                         "job score-cv\ndata applied.csv\ntarget score\n"
                         "inputs years\ncategories region\nmodel linear\n"
                         "folds 4\nridge auto\nid id\n");
    l.files = folder_count(f);
    assert_true(oom_sweep("run_job linear cv", run_run, &l) > 0);
    l.job = folder_write(f, "score-loo.job",
                         "job score-loo\ndata applied.csv\ntarget score\n"
                         "inputs years\nmodel linear\nfolds 15\n");
    l.terms = 2;
    l.files = folder_count(f);
    assert_true(oom_sweep("run_job linear leave-one-out", run_run, &l) > 0);

    /* a network, both kinds, with cross-validation: the Weights sheet,
     * the importance, the fold trainings */
    c.job = folder_write(f, "applied-net.job",
                         "job applied-net\ndata applied.csv\ntarget done\n"
                         "inputs score, years\ncategories region\n"
                         "model network\nhidden 2\nepochs 20\nfolds 3\n");
    c.terms = 4;
    c.warning = "weights to learn from";
    c.files = folder_count(f);
    assert_true(oom_sweep("run_job network yes/no", run_run, &c) > 0);
    l.job = folder_write(f, "score-net.job",
                         "job score-net\ndata applied.csv\ntarget score\n"
                         "inputs years\nmodel network\nhidden 2\n"
                         "epochs 20\nfolds 3\n");
    l.files = folder_count(f);
    assert_true(oom_sweep("run_job network numeric", run_run, &l) > 0);
}

/* ------------------------------------------------------------ grid */

/* A small sheet given cell by cell as a reader gives it: a title row above
 * the header (row 2), more header cells than the first capacity (16), a
 * header cell of each kind (number, date, yes-no, text with blanks round
 * it), a blank header cell over data (a late column, with its warning), a
 * data cell far right (past the first column map, also late), every cell
 * kind in the data, a blank row (invented names and values). */
#define GRID_NAMED 18          /* header cells that name a column */
#define GRID_FAR_COL 40        /* a late column past the first map */

static rf_status grid_cells(grid *g, rf_error *err)
{
    rf_status st;
    char name[16];
    if ((st = grid_text(g, 1, 0, "Closed sales, Oakmere", 21, err)))
        return st;
    /* the header: col 0 number, 1 date, 2 yes-no, 3.. text; col
     * GRID_NAMED is blank (empty text) */
    if ((st = grid_number(g, 2, 0, 2025, err))
        || (st = grid_date(g, 2, 1, table_date_serial(2025, 3, 14), err))
        || (st = grid_bool(g, 2, 2, 1, err)))
        return st;
    for (uint32_t c = 3; c < GRID_NAMED; c++) {
        int k = snprintf(name, sizeof name, " lot %u ", (unsigned)c);
        if ((st = grid_text(g, 2, c, name, (size_t)k, err)))
            return st;
    }
    if ((st = grid_text(g, 2, GRID_NAMED, "", 0, err)))
        return st;
    /* data rows 3 and 5 (row 4 is blank) */
    for (uint32_t r = 3; r <= 5; r += 2) {
        if ((st = grid_number(g, r, 0, 84.5 * r, err))
            || (st = grid_date(g, r, 1, 45000 + r, err))
            || (st = grid_bool(g, r, 2, (int)(r % 2), err))
            || (st = grid_text(g, r, 3, "Fennick", 7, err))
            || (st = grid_error(g, r, 4, "#N/A", 4, err)))
            return st;
        for (uint32_t c = 5; c < GRID_NAMED; c++)
            if ((st = grid_number(g, r, c, c * 1.5, err)))
                return st;
        if ((st = grid_text(g, r, GRID_NAMED, "no header", 9, err))
            || (st = grid_number(g, r, GRID_FAR_COL, 2.385, err)))
            return st;
    }
    return RF_OK;
}

static rf_status run_grid(void *ctx, rf_error *err)
{
    (void)ctx;
    table *t = NULL;
    rf_warnings w = {0};
    rf_status st = RF_OK;
    uint32_t rows = 0, cols = 0;
    grid *g = grid_create("sales.xlsx", "Closed", 2);
    if (g == NULL)
        st = error_nomem(err, "grid_create");
    if (st == RF_OK)
        st = grid_cells(g, err);
    if (st == RF_OK) {
        grid_used(g, &rows, &cols);
        st = grid_finish(g, &t, &w, err);
    }
    oom_disarm();
    oom_warnings(&w);
    if (st != RF_OK) {
        assert_null(t);
    } else {
        assert_int_equal(rows, 5);
        assert_int_equal(cols, GRID_FAR_COL + 1);
        assert_int_equal(table_cols(t), GRID_NAMED + 2);
        assert_int_equal(table_rows(t), 2);
        assert_string_equal(table_column_name(t, 0), "2025");
        assert_string_equal(table_column_name(t, 1), "2025-03-14");
        assert_string_equal(table_column_name(t, 2), "TRUE");
        assert_string_equal(table_column_name(t, 3), "lot 3");
        assert_string_equal(table_column_name(t, GRID_NAMED), "column S");
        assert_string_equal(table_column_name(t, GRID_NAMED + 1),
                            "column AO");
        assert_int_equal(w.n + w.dropped, 2);
    }
    table_free(t);
    grid_free(g);
    error_warnings_clear(&w);
    return st;
}

static void test_oom_grid_reports_every_failure(void **state)
{
    (void)state;
    assert_true(oom_sweep("grid", run_grid, NULL) > 0);
}

/* ------------------------------------------------------------ reader */

/* The committed fixtures (tests/data/README.md says how each was made).
 * A completed read is checked against the fixture's CSV twin, read with
 * csv_read before the sweep: same shape and column names. */
#define DATA "tests/data/"

typedef struct read_ctx {
    const char *path, *name, *sheet, *twin;
    uint32_t header;
    table *ref;   /* the twin */
} read_ctx;

static rf_status run_reader_read(void *ctx, rf_error *err)
{
    read_ctx *c = ctx;
    reader_options o = { c->sheet, c->header, 0 };
    table *t = NULL;
    rf_warnings w = {0};
    rf_status st = reader_read(c->path, c->name, &o, &t, &w, err);
    oom_disarm();
    oom_warnings(&w);
    if (st != RF_OK) {
        assert_null(t);
    } else {
        assert_int_equal(table_rows(t), table_rows(c->ref));
        assert_int_equal(table_cols(t), table_cols(c->ref));
        for (size_t j = 0; j < table_cols(t); j++)
            assert_string_equal(table_column_name(t, j),
                                table_column_name(c->ref, j));
    }
    table_free(t);
    error_warnings_clear(&w);
    return st;
}

static void sweep_reader_read(const char *label, read_ctx *c)
{
    rf_warnings w = {0};
    rf_error e = {0};
    csv_options co = { ',', 0 };
    if (csv_read(c->twin, "twin.csv", &co, &c->ref, &w, &e) != RF_OK)
        fail_msg("%s: %s: %s", c->twin, e.where, e.message);
    error_warnings_clear(&w);
    long points = oom_sweep(label, run_reader_read, c);
    table_free(c->ref);
    assert_true(points > 0);
}

static void test_oom_reader_read_xlsx(void **state)
{
    (void)state;
    /* dates, datetimes, booleans, error cells, blanks */
    read_ctx c = { DATA "xlsx-types.xlsx", "types.xlsx", "Sales",
                   DATA "xlsx-types-Sales.csv", 0, NULL };
    sweep_reader_read("reader_read xlsx-types.xlsx[Sales]", &c);
}

static void test_oom_reader_read_xlsx_header_row(void **state)
{
    (void)state;
    /* a title row, the header in row 4, non-ASCII names, sparse cells, a
     * blank row inside the data */
    read_ctx c = { DATA "xlsx-types.xlsx", "types.xlsx", "Größe €",
                   DATA "xlsx-types-Groesse.csv", 4, NULL };
    sweep_reader_read("reader_read xlsx-types.xlsx[Größe €]", &c);
}

static void test_oom_reader_read_ods(void **state)
{
    (void)state;
    /* every value type, text:s runs, two paragraphs, error formulas and
     * the million repeated blank rows LibreOffice writes; the name says
     * .xlsx, so the detection's warning is allocated too */
    read_ctx c = { DATA "ods-types.ods", "types.xlsx", NULL,
                   DATA "ods-types.csv", 0, NULL };
    sweep_reader_read("reader_read ods-types.ods", &c);
}

/* reader_detect once asked xls_is_encrypted_ooxml, whose int answer
 * could not say "no memory"; detection now leaves that to the .xls reader,
 * which reports it, so every failure here must be reported. */
static void test_oom_reader_read_xls(void **state)
{
    (void)state;
    /* numbers, non-ASCII text, dates, times, booleans, errors, formulas
     * of each result type; FreeXL's own allocations are not injected */
    read_ctx c = { DATA "xls-types.xls", "types.xls", NULL,
                   DATA "xls-types-Types.csv", 0, NULL };
    sweep_reader_read("reader_read xls-types.xls", &c);
}

typedef struct sheets_ctx {
    const char *path, *name;
    reader_format fmt;
    grid_sheet *ref;   /* from a run with nothing injected */
    size_t nref;
} sheets_ctx;

static rf_status run_reader_sheets(void *ctx, rf_error *err)
{
    sheets_ctx *c = ctx;
    grid_sheet *s = NULL;
    size_t n = 0;
    reader_format fmt = FORMAT_CSV;
    rf_warnings w = {0};
    rf_status st = reader_sheets(c->path, c->name, &fmt, &s, &n, &w, err);
    oom_disarm();
    oom_warnings(&w);
    if (st != RF_OK) {
        assert_null(s);
    } else {
        assert_int_equal(fmt, c->fmt);
        assert_int_equal(n, c->nref);
        for (size_t i = 0; i < n; i++) {
            assert_string_equal(s[i].name, c->ref[i].name);
            assert_int_equal(s[i].rows, c->ref[i].rows);
            assert_int_equal(s[i].cols, c->ref[i].cols);
        }
    }
    grid_sheets_free(s, n);
    error_warnings_clear(&w);
    return st;
}

static void sweep_reader_sheets(const char *label, sheets_ctx *c,
                                size_t nsheets, const char *a_name)
{
    rf_warnings w = {0};
    rf_error e = {0};
    reader_format fmt;
    if (reader_sheets(c->path, c->name, &fmt, &c->ref, &c->nref, &w, &e)
        != RF_OK)
        fail_msg("%s: %s: %s", c->path, e.where, e.message);
    error_warnings_clear(&w);
    assert_int_equal(fmt, c->fmt);
    assert_int_equal(c->nref, nsheets);
    int found = 0;
    for (size_t i = 0; i < c->nref; i++) {
        found |= strcmp(c->ref[i].name, a_name) == 0;
        assert_true(c->ref[i].rows > 0 && c->ref[i].cols > 0);
    }
    assert_true(found);
    long points = oom_sweep(label, run_reader_sheets, c);
    grid_sheets_free(c->ref, c->nref);
    assert_true(points > 0);
}

static void test_oom_reader_sheets_xlsx(void **state)
{
    (void)state;
    sheets_ctx c = { DATA "xlsx-types.xlsx", "types.xlsx", FORMAT_XLSX,
                     NULL, 0 };
    sweep_reader_sheets("reader_sheets xlsx-types.xlsx", &c, 2, "Größe €");
}

static void test_oom_reader_sheets_ods(void **state)
{
    (void)state;
    sheets_ctx c = { DATA "ods-sheets.ods", "sheets.ods", FORMAT_ODS, NULL,
                     0 };
    sweep_reader_sheets("reader_sheets ods-sheets.ods", &c, 3,
                        "Ventes détaillées");
}

static void test_oom_reader_sheets_xls(void **state)
{
    (void)state;
    sheets_ctx c = { DATA "xls-sheets.xls", "sheets.xls", FORMAT_XLS, NULL,
                     0 };
    sweep_reader_sheets("reader_sheets xls-sheets.xls", &c, 3,
                        "Größe ÄÖÜ");
}

/* The .xls reader without reader_detect in front (see the bug above). */
static rf_status run_xls_read(void *ctx, rf_error *err)
{
    read_ctx *c = ctx;
    table *t = NULL;
    rf_warnings w = {0};
    rf_status st = xls_read(c->path, c->name, c->sheet, c->header, &t, &w,
                            err);
    oom_disarm();
    oom_warnings(&w);
    if (st != RF_OK) {
        assert_null(t);
    } else {
        assert_int_equal(table_rows(t), table_rows(c->ref));
        assert_int_equal(table_cols(t), table_cols(c->ref));
        for (size_t j = 0; j < table_cols(t); j++)
            assert_string_equal(table_column_name(t, j),
                                table_column_name(c->ref, j));
    }
    table_free(t);
    error_warnings_clear(&w);
    return st;
}

static void test_oom_xls_read(void **state)
{
    (void)state;
    read_ctx c = { DATA "xls-types.xls", "types.xls", NULL,
                   DATA "xls-types-Types.csv", 0, NULL };
    rf_warnings w = {0};
    rf_error e = {0};
    csv_options co = { ',', 0 };
    if (csv_read(c.twin, "twin.csv", &co, &c.ref, &w, &e) != RF_OK)
        fail_msg("%s: %s: %s", c.twin, e.where, e.message);
    error_warnings_clear(&w);
    long points = oom_sweep("xls_read xls-types.xls", run_xls_read, &c);
    table_free(c.ref);
    assert_true(points > 0);
}

static rf_status run_xls_sheets(void *ctx, rf_error *err)
{
    sheets_ctx *c = ctx;
    grid_sheet *s = NULL;
    size_t n = 0;
    rf_status st = xls_sheets(c->path, c->name, &s, &n, err);
    oom_disarm();
    if (st != RF_OK) {
        assert_null(s);
    } else {
        assert_int_equal(n, c->nref);
        for (size_t i = 0; i < n; i++) {
            assert_string_equal(s[i].name, c->ref[i].name);
            assert_int_equal(s[i].rows, c->ref[i].rows);
            assert_int_equal(s[i].cols, c->ref[i].cols);
        }
    }
    grid_sheets_free(s, n);
    return st;
}

static void test_oom_xls_sheets(void **state)
{
    (void)state;
    sheets_ctx c = { DATA "xls-sheets.xls", "sheets.xls", FORMAT_XLS, NULL,
                     0 };
    rf_error e = {0};
    if (xls_sheets(c.path, c.name, &c.ref, &c.nref, &e) != RF_OK)
        fail_msg("%s: %s: %s", c.path, e.where, e.message);
    assert_int_equal(c.nref, 3);
    long points = oom_sweep("xls_sheets xls-sheets.xls", run_xls_sheets,
                            &c);
    grid_sheets_free(c.ref, c.nref);
    assert_true(points > 0);
}

/* ------------------------------------------------------------ peek */

typedef struct peek_ctx {
    const char *path, *name, *sheet;
    char *ref;   /* from a run with nothing injected */
} peek_ctx;

static rf_status run_peek(void *ctx, rf_error *err)
{
    peek_ctx *c = ctx;
    char *s = NULL;
    rf_warnings w = {0};
    rf_status st = peek_text(c->path, c->name, c->sheet, &s, &w, err);
    oom_disarm();
    oom_warnings(&w);
    if (st != RF_OK)
        assert_null(s);
    else
        assert_string_equal(s, c->ref);
    free(s);
    error_warnings_clear(&w);
    return st;
}

static void sweep_peek(const char *label, peek_ctx *c, const char *expect)
{
    rf_warnings w = {0};
    rf_error e = {0};
    if (peek_text(c->path, c->name, c->sheet, &c->ref, &w, &e) != RF_OK)
        fail_msg("%s: %s: %s", c->path, e.where, e.message);
    error_warnings_clear(&w);
    if (strstr(c->ref, expect) == NULL)
        fail_msg("%s: no '%s' in:\n%s", label, expect, c->ref);
    long points = oom_sweep(label, run_peek, c);
    free(c->ref);
    assert_true(points > 0);
}

static void test_oom_peek_workbook_sheets(void **state)
{
    (void)state;
    peek_ctx c = { DATA "xlsx-types.xlsx", "types.xlsx", NULL, NULL };
    sweep_peek("peek_text xlsx-types.xlsx", &c, "Größe €");
}

static void test_oom_peek_workbook_sheet_columns(void **state)
{
    (void)state;
    peek_ctx c = { DATA "ods-sheets.ods", "sheets.ods", "Année 2025",
                   NULL };
    sweep_peek("peek_text ods-sheets.ods[Année 2025]", &c, "surface m²");
}

static void test_oom_peek_csv(void **state)
{
    peek_ctx c = { NULL, "sales.csv", NULL, NULL };
    c.path = folder_write(*state, "sales.csv", csv_text);
    sweep_peek("peek_text sales.csv", &c, "living area");
}

int main(void)
{
    /* as main() does: GSL reports, never aborts */
    gsl_set_error_handler_off();
    const struct CMUnitTest tests[] = {
        cmocka_unit_test_setup_teardown(
            test_oom_csv_read_reports_every_failure, folder_setup,
            folder_teardown),
        cmocka_unit_test_setup_teardown(test_oom_csv_read_growing_buffers,
                                        folder_setup, folder_teardown),
        cmocka_unit_test_setup_teardown(test_oom_csv_read_long_number,
                                        folder_setup, folder_teardown),
        cmocka_unit_test(test_oom_job_parse_reports_every_failure),
        cmocka_unit_test(test_oom_formula_reports_every_failure),
        cmocka_unit_test_setup_teardown(
            test_oom_design_build_reports_every_failure, design_setup,
            design_teardown),
        cmocka_unit_test(test_oom_linear_fit_reports_every_failure),
        cmocka_unit_test(test_oom_logistic_fit_reports_every_failure),
        cmocka_unit_test(test_oom_gradient_fit_reports_every_failure),
        cmocka_unit_test(test_oom_network_reports_every_failure),
        cmocka_unit_test(test_oom_ridge_reports_every_failure),
        cmocka_unit_test(test_oom_classify_reports_every_failure),
        cmocka_unit_test(test_oom_validate_reports_every_failure),
        cmocka_unit_test(test_oom_diagnose_linear_and_vif),
        cmocka_unit_test(test_oom_diagnose_logistic),
        cmocka_unit_test_setup_teardown(
            test_oom_run_job_reports_every_failure, folder_setup,
            folder_teardown),
        cmocka_unit_test_setup_teardown(
            test_oom_run_logistic_job_reports_every_failure, folder_setup,
            folder_teardown),
        cmocka_unit_test(test_oom_grid_reports_every_failure),
        cmocka_unit_test(test_oom_reader_read_xlsx),
        cmocka_unit_test(test_oom_reader_read_xlsx_header_row),
        cmocka_unit_test(test_oom_reader_read_ods),
        cmocka_unit_test(test_oom_reader_read_xls),
        cmocka_unit_test(test_oom_reader_sheets_xlsx),
        cmocka_unit_test(test_oom_reader_sheets_ods),
        cmocka_unit_test(test_oom_reader_sheets_xls),
        cmocka_unit_test(test_oom_xls_read),
        cmocka_unit_test(test_oom_xls_sheets),
        cmocka_unit_test(test_oom_peek_workbook_sheets),
        cmocka_unit_test(test_oom_peek_workbook_sheet_columns),
        cmocka_unit_test_setup_teardown(test_oom_peek_csv, folder_setup,
                                        folder_teardown),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
