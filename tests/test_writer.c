/*
 * test_writer.c: the result workbook writer. Cell values, types and sheet
 * features are read back with an independent oracle, openpyxl 3.0.9 (Debian
 * package python3-openpyxl, run as /usr/bin/python3 because a python3 found
 * on PATH may not have it); the file rules are checked on disk.
 */
#include "testutil.h"

#include <dirent.h>
#include <fcntl.h>
#include <locale.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include <xlsxwriter.h>

#include "../io/error.h"
#include "../io/writer.h"

#define ORACLE_PYTHON "/usr/bin/python3"

/* Prints one line per fact of the workbook at argv[1]:
 *   sheets|A,B            freeze|S|A2            filter|S|A1:C5
 *   cell|S|B2|TYPE|VALUE  (numbers as repr(float), text as UTF-8 hex)
 *   bold|S|A1             cached|S|D2|repr(value) for formula cells
 *   rawnegzero|N, rawnan|N: counts in the sheets' XML (stdlib zipfile) */
static const char oracle_script[] =
    "import sys, openpyxl\n"
    "p = sys.argv[1]\n"
    "wb = openpyxl.load_workbook(p)\n"
    "wbv = openpyxl.load_workbook(p, data_only=True)\n"
    "print('sheets|' + ','.join(wb.sheetnames))\n"
    "for ws in wb.worksheets:\n"
    "    n = ws.title\n"
    "    print('freeze|%s|%s' % (n, ws.freeze_panes))\n"
    "    print('filter|%s|%s' % (n, ws.auto_filter.ref))\n"
    "    for row in ws.iter_rows():\n"
    "        for c in row:\n"
    "            v = c.value\n"
    "            if v is None:\n"
    "                continue\n"
    "            if isinstance(v, bool):\n"
    "                s = str(v)\n"
    "            elif isinstance(v, (int, float)):\n"
    "                s = repr(float(v))\n"
    "            else:\n"
    "                s = str(v).encode('utf-8').hex()\n"
    "            print('cell|%s|%s|%s|%s' % (n, c.coordinate, c.data_type, s))\n"
    "            if c.font is not None and c.font.b:\n"
    "                print('bold|%s|%s' % (n, c.coordinate))\n"
    "            if c.data_type == 'f':\n"
    "                print('cached|%s|%s|%r' % (n, c.coordinate,\n"
    "                      wbv[n][c.coordinate].value))\n"
    "import zipfile\n"
    "with zipfile.ZipFile(p) as z:\n"
    "    raw = b''.join(z.read(m) for m in z.namelist()\n"
    "                   if m.startswith('xl/worksheets/'))\n"
    "print('rawnegzero|%d' % raw.count(b'<v>-0</v>'))\n"
    "print('rawnan|%d' % (raw.count(b'NAN') + raw.count(b'INF')))\n";

typedef struct fixture {
    char dir[64];
    char path[160];
    char **lines;           /* oracle output */
    size_t n_lines;
} fixture;

static int setup(void **state)
{
    fixture *f = calloc(1, sizeof *f);
    if (f == NULL)
        return -1;
    snprintf(f->dir, sizeof f->dir, "/tmp/rowfit-writer-XXXXXX");
    if (mkdtemp(f->dir) == NULL) {
        free(f);
        return -1;
    }
    snprintf(f->path, sizeof f->path, "%s/results.xlsx", f->dir);
    *state = f;
    return 0;
}

static void free_lines(fixture *f)
{
    for (size_t i = 0; i < f->n_lines; i++)
        free(f->lines[i]);
    free(f->lines);
    f->lines = NULL;
    f->n_lines = 0;
}

/* Counts the files in dir whose names contain part. */
static int count_named(const char *dir, const char *part)
{
    DIR *d = opendir(dir);
    if (d == NULL)
        return -1;
    int n = 0;
    struct dirent *e;
    while ((e = readdir(d)) != NULL)
        if (strstr(e->d_name, part) != NULL)
            n++;
    closedir(d);
    return n;
}

static int count_entries(const char *dir)
{
    return count_named(dir, "") - 2;    /* . and .. */
}

static int teardown(void **state)
{
    fixture *f = *state;
    /* Every test, passing or not, must leave no temporary file behind. */
    int tmp = count_named(f->dir, ".tmp-");
    char cmd[128];
    snprintf(cmd, sizeof cmd, "rm -rf '%s'", f->dir);
    int rc = system(cmd);
    free_lines(f);
    free(f);
    return (tmp == 0 && rc == 0) ? 0 : -1;
}

/* Runs the oracle on path and keeps its lines in f. */
static void read_back(fixture *f, const char *path)
{
    free_lines(f);
    char script[128];
    snprintf(script, sizeof script, "%s/oracle.py", f->dir);
    FILE *fp = fopen(script, "w");
    assert_non_null(fp);
    fputs(oracle_script, fp);
    fclose(fp);
    char cmd[512];
    snprintf(cmd, sizeof cmd, ORACLE_PYTHON " '%s' '%s'", script, path);
    FILE *p = popen(cmd, "r");
    assert_non_null(p);
    char *line = NULL;
    size_t cap = 0;
    ssize_t len;
    while ((len = getline(&line, &cap, p)) > 0) {
        if (line[len - 1] == '\n')
            line[len - 1] = '\0';
        char **lines = realloc(f->lines, (f->n_lines + 1) * sizeof *lines);
        assert_non_null(lines);
        f->lines = lines;
        f->lines[f->n_lines] = strdup(line);
        assert_non_null(f->lines[f->n_lines]);
        f->n_lines++;
    }
    free(line);
    assert_int_equal(pclose(p), 0);
    unlink(script);
    assert_true(f->n_lines > 0);
}

/* The rest of the oracle line that starts with key, or NULL. */
static const char *fact(const fixture *f, const char *key)
{
    size_t k = strlen(key);
    for (size_t i = 0; i < f->n_lines; i++)
        if (strncmp(f->lines[i], key, k) == 0)
            return f->lines[i] + k;
    return NULL;
}

/* The cell's "TYPE|VALUE" from the oracle, failing when absent. */
static const char *cell(const fixture *f, const char *sheet, const char *ref)
{
    char key[128];
    snprintf(key, sizeof key, "cell|%s|%s|", sheet, ref);
    const char *v = fact(f, key);
    if (v == NULL)
        fail_msg("no cell %s!%s in the workbook", sheet, ref);
    return v;
}

static int has_cell(const fixture *f, const char *sheet, const char *ref)
{
    char key[128];
    snprintf(key, sizeof key, "cell|%s|%s|", sheet, ref);
    return fact(f, key) != NULL;
}

static double cell_number(const fixture *f, const char *sheet,
                          const char *ref)
{
    const char *v = cell(f, sheet, ref);
    assert_true(strncmp(v, "n|", 2) == 0);
    return strtod(v + 2, NULL);
}

static void hex_of(const char *s, char *out)
{
    for (; *s; s++, out += 2)
        sprintf(out, "%02x", (unsigned char)*s);
    *out = '\0';
}

static void assert_text_cell(const fixture *f, const char *sheet,
                             const char *ref, const char *want)
{
    const char *v = cell(f, sheet, ref);
    char *hex = malloc(2 * strlen(want) + 3);
    assert_non_null(hex);
    hex[0] = 's';
    hex[1] = '|';
    hex_of(want, hex + 2);
    int same = strcmp(v, hex) == 0;
    free(hex);
    if (!same)
        fail_msg("%s!%s is %.60s..., not the expected text", sheet, ref, v);
}

static writer *open_ok(const char *path, int force)
{
    writer *w = NULL;
    rf_error err = {0};
    rf_status s = writer_open(path, force, NULL, 0, "rowfit 0.1.0", &w, &err);
    if (s != RF_OK)
        fail_msg("writer_open: %s: %s", err.where, err.message);
    return w;
}

static void commit_ok(writer *w)
{
    rf_error err = {0};
    rf_status s = writer_commit(w, &err);
    if (s != RF_OK)
        fail_msg("writer_commit: %s: %s", err.where, err.message);
}

/* Writes a one-sheet workbook of ours at path. */
static void write_small(const char *path, int force, double v)
{
    writer *w = open_ok(path, force);
    rf_error err = {0};
    writer_sheet *s = writer_add_sheet(w, "Summary", &err);
    assert_non_null(s);
    assert_int_equal(writer_number(s, 0, 0, v, WFMT_NONE, NULL), RF_OK);
    commit_ok(w);
}

static void write_file(const char *path, const char *text)
{
    FILE *fp = fopen(path, "w");
    assert_non_null(fp);
    fputs(text, fp);
    fclose(fp);
}

static int open_fds(void)
{
    return count_entries("/proc/self/fd");
}

/* ------------------------------------------------------------------ */

static void test_writer_round_trips_cells(void **state)
{
    fixture *f = *state;
    rf_warnings warns = {0};
    writer *w = open_ok(f->path, 0);
    writer_set_warnings(w, &warns);
    rf_error err = {0};
    writer_sheet *est = writer_add_sheet(w, "Estimates", &err);
    writer_sheet *sum = writer_add_sheet(w, "Summary", &err);
    writer_sheet *job = writer_add_sheet(w, "Job", &err);
    assert_non_null(est);
    assert_non_null(sum);
    assert_non_null(job);

    const char *const names[] = {"source", "estimate", "twice", "status"};
    assert_int_equal(writer_column(est, 1, 14.0, WFMT_FIXED2), RF_OK);
    assert_int_equal(writer_header(est, names, 4, 6), RF_OK);

    const double sum01 = 0.1 + 0.2;
    const double vals[] = {sum01, 1e-300, -0.0, 238517.4096381726,
                           -7.25e12};
    for (uint32_t i = 0; i < 5; i++) {
        int blank = -1;
        assert_int_equal(writer_text(est, i + 1, 0, "data", WFMT_NONE),
                         RF_OK);
        assert_int_equal(writer_number(est, i + 1, 1, vals[i], WFMT_SIG,
                                       &blank), RF_OK);
        assert_int_equal(blank, 0);
        char formula[32];
        snprintf(formula, sizeof formula, "=B%u*2", (unsigned)i + 2);
        assert_int_equal(writer_formula(est, i + 1, 2, formula,
                                        2 * vals[i], WFMT_SIG), RF_OK);
    }
    /* Non-finite values become blanks and say so. */
    const double bad[] = {NAN, INFINITY, -INFINITY};
    for (uint32_t i = 0; i < 3; i++) {
        int blank = 0;
        assert_int_equal(writer_number(est, 6, (uint16_t)(i + 1), bad[i],
                                       WFMT_FIXED2, &blank), RF_OK);
        assert_int_equal(blank, 1);
    }
    assert_int_equal(writer_text(sum, 0, 0, "measure", WFMT_BOLD), RF_OK);
    assert_int_equal(writer_text(job, 0, 0, "job spring", WFMT_WRAP), RF_OK);
    commit_ok(w);
    assert_int_equal(warns.n, 0);

    read_back(f, f->path);
    assert_string_equal(fact(f, "sheets|"), "Estimates,Summary,Job");
    assert_string_equal(fact(f, "freeze|Estimates|"), "A2");
    assert_string_equal(fact(f, "filter|Estimates|"), "A1:D7");
    assert_string_equal(fact(f, "freeze|Job|"), "None");
    for (int c = 0; c < 4; c++) {
        char ref[4] = {(char)('A' + c), '1', 0, 0};
        char key[32];
        snprintf(key, sizeof key, "bold|Estimates|%s", ref);
        assert_non_null(fact(f, key));
        assert_text_cell(f, "Estimates", ref, names[c]);
    }
    assert_null(fact(f, "bold|Estimates|A2"));
    assert_null(fact(f, "bold|Estimates|B2"));

    /* Numbers: libxlsxwriter prints 16 significant digits, so agreement to
     * 1e-15 relative is the most the file can carry. */
    const char *const refs[] = {"B2", "B3", "B4", "B5", "B6"};
    for (int i = 0; i < 5; i++)
        assert_close(cell_number(f, "Estimates", refs[i]), vals[i], 1e-15,
                     0.0);
    assert_true(cell_number(f, "Estimates", "B3") > 0.0);  /* not 0 */
    assert_false(signbit(cell_number(f, "Estimates", "B4")));
    /* openpyxl reads "-0" as 0, so look at the stored text itself. */
    assert_string_equal(fact(f, "rawnegzero|"), "0");
    assert_string_equal(fact(f, "rawnan|"), "0");
    assert_false(has_cell(f, "Estimates", "B7"));
    assert_false(has_cell(f, "Estimates", "C7"));
    assert_false(has_cell(f, "Estimates", "D7"));

    /* Formulas stay live and carry their value. */
    char want[80], hex[64];
    hex_of("=B2*2", hex);
    snprintf(want, sizeof want, "f|%s", hex);
    assert_string_equal(cell(f, "Estimates", "C2"), want);
    assert_close(strtod(fact(f, "cached|Estimates|C2|"), NULL), 2 * sum01,
                 1e-15, 0.0);
    assert_text_cell(f, "Estimates", "A6", "data");
    assert_non_null(fact(f, "bold|Summary|A1"));
    assert_text_cell(f, "Job", "A1", "job spring");
}

static void test_writer_formulas_keep_cached_values(void **state)
{
    fixture *f = *state;
    writer *w = open_ok(f->path, 0);
    rf_error err = {0};
    writer_sheet *s = writer_add_sheet(w, "Estimates", &err);
    assert_non_null(s);
    assert_int_equal(writer_number(s, 0, 0, 2.385, WFMT_NONE, NULL), RF_OK);
    assert_int_equal(writer_formula(s, 0, 1, "=A1*2", 4.77, WFMT_FIXED4),
                     RF_OK);
    assert_int_equal(writer_formula(s, 0, 2, "A1/7", 2.385 / 7, WFMT_NONE),
                     RF_OK);
    assert_int_equal(writer_formula(s, 0, 3, "LN(A1-3)", NAN, WFMT_NONE),
                     RF_OK);
    /* a formula with a text result keeps its text, markup and all */
    assert_int_equal(writer_formula_text(s, 0, 4, "=IF(A1>=2,\"<yes> & co\","
                                         "\"no\")", "<yes> & co", WFMT_NONE),
                     RF_OK);
    assert_int_equal(writer_formula_text(s, 0, 5, "IF(A1>=3,\"yes\",\"no\")",
                                         "no", WFMT_NONE), RF_OK);
    commit_ok(w);
    read_back(f, f->path);
    char want[64];
    hex_of("=A1*2", want);
    char key[80];
    snprintf(key, sizeof key, "f|%s", want);
    assert_string_equal(cell(f, "Estimates", "B1"), key);
    hex_of("=A1/7", want);
    snprintf(key, sizeof key, "f|%s", want);
    assert_string_equal(cell(f, "Estimates", "C1"), key);
    assert_close(strtod(fact(f, "cached|Estimates|B1|"), NULL), 4.77, 1e-15,
                 0.0);
    assert_close(strtod(fact(f, "cached|Estimates|C1|"), NULL), 2.385 / 7,
                 1e-15, 0.0);
    /* No cached number rather than a misleading 0. */
    assert_string_equal(fact(f, "cached|Estimates|D1|"), "None");
    hex_of("=IF(A1>=2,\"<yes> & co\",\"no\")", want);
    snprintf(key, sizeof key, "f|%s", want);
    assert_string_equal(cell(f, "Estimates", "E1"), key);
    assert_string_equal(fact(f, "cached|Estimates|E1|"), "'<yes> & co'");
    assert_string_equal(fact(f, "cached|Estimates|F1|"), "'no'");
}

static void test_writer_writes_text_as_text(void **state)
{
    fixture *f = *state;
    rf_warnings warns = {0};
    writer *w = open_ok(f->path, 0);
    writer_set_warnings(w, &warns);
    rf_error err = {0};
    writer_sheet *job = writer_add_sheet(w, "Job", &err);
    assert_non_null(job);
    const char *const risky[] = {"=1+1", "+1", "-1", "@SUM(A1)",
                                 "=cmd|' /C calc'!A0"};
    for (uint16_t i = 0; i < 5; i++)
        assert_int_equal(writer_text(job, 0, i, risky[i], WFMT_NONE), RF_OK);
    assert_int_equal(writer_text(job, 1, 0, "ab\xff" "cd\xc3", WFMT_NONE),
                     RF_OK);
    assert_int_equal(writer_text(job, 1, 1, "", WFMT_WRAP), RF_OK);
    assert_int_equal(writer_text(job, 1, 2, "\xed\xa0\x80" "x", WFMT_NONE),
                     RF_OK);        /* an encoded surrogate is not UTF-8 */
    size_t big = 40000;
    char *lng = malloc(big + 1);
    assert_non_null(lng);
    for (size_t i = 0; i < big; i += 2)
        memcpy(lng + i, "\xc3\xa9", 2);
    lng[big] = '\0';
    assert_int_equal(writer_text(job, 2, 0, lng, WFMT_WRAP), RF_OK);
    commit_ok(w);

    assert_int_equal(warns.n, 3);
    assert_non_null(strstr(warns.items[0], "results.xlsx[Job]!A2"));
    assert_non_null(strstr(warns.items[1], "results.xlsx[Job]!C2"));
    assert_non_null(strstr(warns.items[2], "results.xlsx[Job]!A3"));
    assert_non_null(strstr(warns.items[2], "cut"));
    error_warnings_clear(&warns);

    read_back(f, f->path);
    const char *const refs[] = {"A1", "B1", "C1", "D1", "E1"};
    for (int i = 0; i < 5; i++)
        assert_text_cell(f, "Job", refs[i], risky[i]);
    assert_text_cell(f, "Job", "A2", "ab\xef\xbf\xbd" "cd\xef\xbf\xbd");
    assert_false(has_cell(f, "Job", "B2"));
    assert_text_cell(f, "Job", "C2", "\xef\xbf\xbd\xef\xbf\xbd\xef\xbf\xbd"
                                     "x");
    /* The cut keeps whole characters: 16,383 of them, 32,766 bytes. */
    lng[32766] = '\0';
    assert_text_cell(f, "Job", "A3", lng);
    free(lng);
}

/* A literal "_x0041_" would be decoded as "A" by a reader following
 * ECMA-376's ST_Xstring escaping; the writer escapes its underscore.
 * openpyxl 3.0.9 does not decode these escapes (seen), so the oracle shows
 * the escaped form. */
static void test_writer_escapes_literal_x_sequences(void **state)
{
    fixture *f = *state;
    writer *w = open_ok(f->path, 0);
    rf_error err = {0};
    writer_sheet *s = writer_add_sheet(w, "Job", &err);
    assert_non_null(s);
    assert_int_equal(writer_text(s, 0, 0, "a_x0041_b", WFMT_NONE), RF_OK);
    assert_int_equal(writer_text(s, 0, 1, "a_x004_b_x", WFMT_NONE), RF_OK);
    commit_ok(w);
    read_back(f, f->path);
    assert_text_cell(f, "Job", "A1", "a_x005F_x0041_b");
    assert_text_cell(f, "Job", "B1", "a_x004_b_x");
}

static void test_writer_refuses_input_path(void **state)
{
    fixture *f = *state;
    char input[200], other[200], hard[200];
    snprintf(input, sizeof input, "%s/sales.csv", f->dir);
    snprintf(other, sizeof other, "%s/../%s/sales.csv", f->dir,
             strrchr(f->dir, '/') + 1);
    snprintf(hard, sizeof hard, "%s/hard.csv", f->dir);
    write_file(input, "price\n1\n");
    assert_int_equal(link(input, hard), 0);

    const char *const inputs[] = {"spring.job", input};
    writer *w = NULL;
    rf_error err = {0};
    /* The same name, another spelling of it, and a hard link to it. */
    const char *const targets[] = {input, other, hard};
    for (int i = 0; i < 3; i++) {
        err = (rf_error){0};
        assert_int_equal(writer_open(targets[i], 1, inputs, 2, "rowfit",
                                     &w, &err), RF_EINPUT);
        assert_null(w);
        assert_non_null(strstr(err.message, "would replace the input file"));
    }
    /* The input is untouched. */
    FILE *fp = fopen(input, "r");
    assert_non_null(fp);
    char buf[32] = {0};
    assert_true(fread(buf, 1, sizeof buf - 1, fp) > 0);
    fclose(fp);
    assert_string_equal(buf, "price\n1\n");
}

static void test_writer_refuses_foreign_file_without_force(void **state)
{
    fixture *f = *state;
    write_file(f->path, "someone's notes\n");
    writer *w = NULL;
    rf_error err = {0};
    assert_int_equal(writer_open(f->path, 0, NULL, 0, "rowfit", &w, &err),
                     RF_EINPUT);
    assert_null(w);
    assert_string_equal(err.where, f->path);
    assert_non_null(strstr(err.message, "was not written by rowfit; use "
                                        "--force to replace it"));
    assert_int_equal(count_entries(f->dir), 1);

    write_small(f->path, 1, 2.385);
    assert_int_equal(writer_is_ours(f->path), 1);
    read_back(f, f->path);
    assert_close(cell_number(f, "Summary", "A1"), 2.385, 1e-15, 0.0);
}

static void test_writer_replaces_its_own_output(void **state)
{
    fixture *f = *state;
    write_small(f->path, 0, 1.5);
    write_small(f->path, 0, 4.25);      /* ours: no force needed */
    read_back(f, f->path);
    assert_close(cell_number(f, "Summary", "A1"), 4.25, 1e-15, 0.0);
    assert_int_equal(count_entries(f->dir), 1);
}

static void test_writer_refuses_a_folder_as_output(void **state)
{
    fixture *f = *state;
    writer *w = NULL;
    rf_error err = {0};
    assert_int_equal(writer_open(f->dir, 1, NULL, 0, "rowfit", &w, &err),
                     RF_EINPUT);
    assert_non_null(strstr(err.message, "not a regular file"));
    char slash[200];
    snprintf(slash, sizeof slash, "%s/", f->dir);
    assert_int_equal(writer_open(slash, 1, NULL, 0, "rowfit", &w, &err),
                     RF_EINPUT);
    assert_int_equal(writer_open("", 1, NULL, 0, "rowfit", &w, &err),
                     RF_EINPUT);
    assert_null(w);
}

static void test_writer_open_fails_in_missing_folder(void **state)
{
    fixture *f = *state;
    char path[200];
    snprintf(path, sizeof path, "%s/no-such-folder/out.xlsx", f->dir);
    writer *w = NULL;
    rf_error err = {0};
    /* a folder that is not there is the user's mistake: exit 1, not 3 */
    assert_int_equal(writer_open(path, 0, NULL, 0, "rowfit", &w, &err),
                     RF_EINPUT);
    assert_null(w);
    assert_non_null(strstr(err.message, "does not exist"));
    assert_int_equal(count_entries(f->dir), 0);
    /* writer_check, for `rowfit check`, says the same and creates nothing */
    assert_int_equal(writer_check(path, 0, NULL, 0, &err), RF_EINPUT);
    assert_non_null(strstr(err.message, "does not exist"));
    assert_int_equal(count_entries(f->dir), 0);
}

static void test_writer_failed_commit_leaves_nothing(void **state)
{
    fixture *f = *state;
    char sub[128], path[200], cmd[256];
    snprintf(sub, sizeof sub, "%s/out", f->dir);
    assert_int_equal(mkdir(sub, 0755), 0);
    snprintf(path, sizeof path, "%s/results.xlsx", sub);
    writer *w = open_ok(path, 0);
    rf_error err = {0};
    writer_sheet *s = writer_add_sheet(w, "Estimates", &err);
    assert_non_null(s);
    for (uint32_t r = 0; r < 100; r++)
        assert_int_equal(writer_number(s, r, 0, r * 1.25, WFMT_NONE, NULL),
                         RF_OK);
    snprintf(cmd, sizeof cmd, "rm -rf '%s'", sub);
    assert_int_equal(system(cmd), 0);
    assert_int_equal(writer_commit(w, &err), RF_ESYSTEM);
    assert_string_equal(err.where, path);
    assert_int_equal(count_entries(f->dir), 0);
}

static void test_writer_failed_rename_keeps_previous(void **state)
{
    fixture *f = *state;
    char inner[200];
    writer *w = open_ok(f->path, 0);
    rf_error err = {0};
    writer_sheet *s = writer_add_sheet(w, "Summary", &err);
    assert_non_null(s);
    assert_int_equal(writer_number(s, 0, 0, 7.5, WFMT_NONE, NULL), RF_OK);
    /* Something else takes the name meanwhile: a folder that is not
     * empty, which rename cannot replace. */
    assert_int_equal(mkdir(f->path, 0755), 0);
    snprintf(inner, sizeof inner, "%s/keep.txt", f->path);
    write_file(inner, "keep\n");
    assert_int_equal(writer_commit(w, &err), RF_ESYSTEM);
    assert_string_equal(err.where, f->path);
    assert_int_equal(count_entries(f->dir), 1);
    assert_int_equal(access(inner, R_OK), 0);
}

static void test_writer_reports_library_write_failure(void **state)
{
    fixture *f = *state;
    writer *w = open_ok(f->path, 0);
    rf_error err = {0};
    writer_sheet *s = writer_add_sheet(w, "Summary", &err);
    assert_non_null(s);
    assert_int_equal(writer_number(s, 0, 0, 7.5, WFMT_NONE, NULL), RF_OK);
    /* Make the temporary file unwritable for libxlsxwriter: replace it by
     * a folder of the same name. (libxlsxwriter prints an [ERROR] line on
     * stderr here; that is the library's, not ours.) */
    DIR *d = opendir(f->dir);
    assert_non_null(d);
    char tmp[512] = "";
    struct dirent *e;
    while ((e = readdir(d)) != NULL)
        if (strstr(e->d_name, ".tmp-") != NULL)
            snprintf(tmp, sizeof tmp, "%s/%s", f->dir, e->d_name);
    closedir(d);
    assert_true(tmp[0] != '\0');
    assert_int_equal(unlink(tmp), 0);
    assert_int_equal(mkdir(tmp, 0755), 0);
    assert_int_equal(writer_commit(w, &err), RF_ESYSTEM);
    assert_non_null(strstr(err.message, "cannot write the result"));
    assert_int_equal(access(f->path, F_OK), -1);
    assert_int_equal(rmdir(tmp), 0);
}

static void test_writer_abort_leaves_nothing(void **state)
{
    fixture *f = *state;
    write_small(f->path, 0, 3.0);
    struct stat before;
    assert_int_equal(stat(f->path, &before), 0);
    int fds = open_fds();
    writer *w = open_ok(f->path, 0);
    rf_error err = {0};
    for (int k = 0; k < 3; k++) {
        char name[16];
        snprintf(name, sizeof name, "Sheet %d", k);
        writer_sheet *s = writer_add_sheet(w, name, &err);
        assert_non_null(s);
        for (uint32_t r = 0; r < 50; r++)
            assert_int_equal(writer_number(s, r, 1, r / 3.0, WFMT_NONE,
                                           NULL), RF_OK);
    }
    writer_abort(w);
    writer_abort(NULL);
    /* Only the previous result remains, unchanged, and no stream of the
     * constant-memory mode is left open. */
    assert_int_equal(count_entries(f->dir), 1);
    struct stat after;
    assert_int_equal(stat(f->path, &after), 0);
    assert_int_equal(after.st_ino, before.st_ino);
    assert_int_equal(after.st_size, before.st_size);
    assert_int_equal(open_fds(), fds);
    read_back(f, f->path);
    assert_close(cell_number(f, "Summary", "A1"), 3.0, 1e-15, 0.0);
}

/* Runs a python snippet (stdlib zipfile only) with dir as argv[1]. */
static void run_python(const fixture *f, const char *code)
{
    char script[128];
    snprintf(script, sizeof script, "%s/make.py", f->dir);
    write_file(script, code);
    char cmd[300];
    snprintf(cmd, sizeof cmd, ORACLE_PYTHON " '%s' '%s'", script, f->dir);
    assert_int_equal(system(cmd), 0);
    unlink(script);
}

static void test_writer_recognises_only_its_files(void **state)
{
    fixture *f = *state;
    char p[200];
    write_small(f->path, 0, 1.0);
    assert_int_equal(writer_is_ours(f->path), 1);

    /* An .xlsx written by libxlsxwriter directly, without our mark. */
    snprintf(p, sizeof p, "%s/plain.xlsx", f->dir);
    lxw_workbook *wb = workbook_new(p);
    assert_non_null(wb);
    workbook_set_custom_property_string(wb, "other", "rowfit 0.1.0");
    worksheet_write_number(workbook_add_worksheet(wb, NULL), 0, 0, 1, NULL);
    assert_int_equal(workbook_close(wb), LXW_NO_ERROR);
    assert_int_equal(writer_is_ours(p), 0);

    run_python(f,
        "import sys, zipfile\n"
        "d = sys.argv[1]\n"
        "ns = 'http://schemas.openxmlformats.org/officeDocument/2006/'\n"
        "prop = ('<Properties xmlns=\"' + ns + 'custom-properties\" '\n"
        "        'xmlns:vt=\"' + ns + 'docPropsVTypes\"><property '\n"
        "        'fmtid=\"{D5CDD505-2E9C-101B-9397-08002B2CF9AE}\" pid=\"2\" '\n"
        "        'name=\"rowfit\"><vt:lpwstr>rowfit 9</vt:lpwstr></property>'\n"
        "        '</Properties>')\n"
        "def z(name, parts):\n"
        "    with zipfile.ZipFile(d + '/' + name, 'w',\n"
        "                         zipfile.ZIP_DEFLATED) as f:\n"
        "        for k, v in parts.items():\n"
        "            f.writestr(k, v)\n"
        "z('hand.xlsx', {'docProps/custom.xml': prop})\n"
        "z('doctype.xlsx', {'docProps/custom.xml':\n"
        "  '<!DOCTYPE Properties [<!ENTITY e \"rowfit 9\">]>' + prop})\n"
        "z('plain.zip', {'readme.txt': 'hello'})\n"
        "z('empty.xlsx', {'docProps/custom.xml': prop.replace(\n"
        "  'rowfit 9', '')})\n"
        "z('big.xlsx', {'docProps/custom.xml':\n"
        "  prop.replace('</Properties>', ' ' * (2 << 20) + '</Properties>')})\n"
        "z('broken.xlsx', {'docProps/custom.xml': prop[:-5]})\n");
    const struct { const char *name; int want; } cases[] = {
        {"hand.xlsx", 1},       /* a mark written by another tool counts */
        {"doctype.xlsx", 0},    /* DOCTYPE refused */
        {"plain.zip", 0},
        {"empty.xlsx", 0},      /* mark with no value */
        {"big.xlsx", 0},        /* custom.xml over 1 MiB */
        {"broken.xlsx", 0},     /* not well-formed */
    };
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        snprintf(p, sizeof p, "%s/%s", f->dir, cases[i].name);
        if (writer_is_ours(p) != cases[i].want)
            fail_msg("writer_is_ours(%s) != %d", cases[i].name,
                     cases[i].want);
    }
    snprintf(p, sizeof p, "%s/notes.txt", f->dir);
    write_file(p, "PK but not really\n");
    assert_int_equal(writer_is_ours(p), 0);
    snprintf(p, sizeof p, "%s/missing.xlsx", f->dir);
    assert_int_equal(writer_is_ours(p), 0);
    assert_int_equal(writer_is_ours(f->dir), 0);
    assert_int_equal(writer_is_ours(NULL), 0);
}

/* Runs fn with stderr sent to a file; returns how many bytes it printed. */
static long stderr_bytes_of(const fixture *f, void (*fn)(writer *),
                            writer *w)
{
    char p[200];
    snprintf(p, sizeof p, "%s/stderr.txt", f->dir);
    fflush(stderr);
    int saved = dup(2);
    int fd = open(p, O_WRONLY | O_CREAT | O_TRUNC, 0600);
    assert_true(saved >= 0 && fd >= 0);
    dup2(fd, 2);
    close(fd);
    fn(w);
    fflush(stderr);
    dup2(saved, 2);
    close(saved);
    struct stat st;
    assert_int_equal(stat(p, &st), 0);
    unlink(p);
    return (long)st.st_size;
}

static void add_bad_sheets(writer *w)
{
    const char *const bad[] = {
        "", "abcdefghijklmnopqrstuvwxyz789012", "a/b", "a[1]", "q?", "x:y",
        "back\\slash", "st*r", "'quoted", "quoted'", "history", "ESTIMATES",
        "bad\xff", NULL,
    };
    for (int i = 0; i < 14; i++) {
        rf_error err = {0};
        assert_null(writer_add_sheet(w, bad[i], &err));
        assert_int_equal(err.status, RF_EINPUT);
        assert_non_null(strstr(err.message, "sheet name"));
    }
}

static void test_writer_rejects_bad_sheet_names_quietly(void **state)
{
    fixture *f = *state;
    writer *w = open_ok(f->path, 0);
    rf_error err = {0};
    assert_non_null(writer_add_sheet(w, "Estimates", &err));
    assert_int_equal(stderr_bytes_of(f, add_bad_sheets, w), 0);
    /* 31 two-byte characters is 31 characters, not 62. */
    char name[64] = "";
    for (int i = 0; i < 31; i++)
        strcat(name, "\xc3\xa9");
    assert_non_null(writer_add_sheet(w, name, &err));
    commit_ok(w);
    read_back(f, f->path);
    char want[128];
    snprintf(want, sizeof want, "Estimates,%s", name);
    assert_string_equal(fact(f, "sheets|"), want);
}

static void test_writer_reports_rows_out_of_order(void **state)
{
    fixture *f = *state;
    writer *w = open_ok(f->path, 0);
    rf_error err = {0};
    writer_sheet *s = writer_add_sheet(w, "Estimates", &err);
    assert_non_null(s);
    assert_int_equal(writer_status(w, &err), RF_OK);
    assert_int_equal(writer_number(s, 5, 0, 1.0, WFMT_NONE, NULL), RF_OK);
    assert_int_equal(writer_number(s, 5, 1, 1.0, WFMT_NONE, NULL), RF_OK);
    assert_int_equal(writer_text(s, 3, 0, "late", WFMT_NONE), RF_ESYSTEM);
    /* The first failure sticks, with its place. */
    assert_int_equal(writer_blank(s, 9, 0, WFMT_FIXED2), RF_ESYSTEM);
    assert_int_equal(writer_status(w, &err), RF_ESYSTEM);
    assert_string_equal(err.where, "results.xlsx[Estimates]!A4");
    assert_non_null(strstr(err.message, "increasing order"));
    err = (rf_error){0};
    assert_int_equal(writer_commit(w, &err), RF_ESYSTEM);
    assert_string_equal(err.where, "results.xlsx[Estimates]!A4");
    assert_int_equal(count_entries(f->dir), 0);
}

static void test_writer_reports_cells_beyond_the_sheet(void **state)
{
    fixture *f = *state;
    writer *w = open_ok(f->path, 0);
    rf_error err = {0};
    writer_sheet *s = writer_add_sheet(w, "Estimates", &err);
    assert_non_null(s);
    assert_int_equal(writer_number(s, 1048576, 0, 1.0, WFMT_NONE, NULL),
                     RF_EINPUT);
    assert_int_equal(writer_status(w, &err), RF_EINPUT);
    assert_string_equal(err.where, "results.xlsx[Estimates]!A1048577");
    writer_abort(w);

    w = open_ok(f->path, 0);
    s = writer_add_sheet(w, "Estimates", &err);
    assert_int_equal(writer_column(s, 16384, 10.0, WFMT_NONE), RF_EINPUT);
    writer_abort(w);
    w = open_ok(f->path, 0);
    s = writer_add_sheet(w, "Estimates", &err);
    assert_int_equal(writer_formula(s, 0, 0, "=", 1.0, WFMT_NONE),
                     RF_ESYSTEM);
    writer_abort(w);
    assert_int_equal(count_entries(f->dir), 0);
}

static void test_writer_names_cells(void **state)
{
    (void)state;
    /* Column letters: A..Z, AA.., the last column of a sheet is XFD
     * (ECMA-376 Part 1, A1 references; common practice). */
    const struct { uint32_t r; uint16_t c; const char *want; } cases[] = {
        {0, 0, "A1"}, {1, 25, "Z2"}, {0, 26, "AA1"}, {9, 27, "AB10"},
        {0, 701, "ZZ1"}, {0, 702, "AAA1"}, {1048575, 16383, "XFD1048576"},
    };
    char buf[16];
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++)
        assert_string_equal(writer_cell_name(cases[i].r, cases[i].c, buf,
                                             sizeof buf), cases[i].want);
    char small[3];
    assert_string_equal(writer_cell_name(0, 27, small, sizeof small), "AB");
}

static void write_fixed(const char *path)
{
    writer *w = open_ok(path, 1);
    writer_set_created(w, 1700000000);
    rf_error err = {0};
    writer_sheet *s = writer_add_sheet(w, "Estimates", &err);
    const char *const names[] = {"row", "estimate"};
    assert_int_equal(writer_header(s, names, 2, 20), RF_OK);
    for (uint32_t r = 1; r <= 20; r++) {
        assert_int_equal(writer_number(s, r, 0, r, WFMT_INTEGER, NULL),
                         RF_OK);
        assert_int_equal(writer_number(s, r, 1, 1.0 / r, WFMT_PVALUE, NULL),
                         RF_OK);
    }
    commit_ok(w);
}

static char *slurp(const char *path, long *n)
{
    FILE *fp = fopen(path, "rb");
    assert_non_null(fp);
    fseek(fp, 0, SEEK_END);
    *n = ftell(fp);
    rewind(fp);
    char *buf = malloc((size_t)*n);
    assert_non_null(buf);
    assert_int_equal(fread(buf, 1, (size_t)*n, fp), (size_t)*n);
    fclose(fp);
    return buf;
}

static void test_writer_fixed_created_gives_identical_files(void **state)
{
    fixture *f = *state;
    char other[200];
    snprintf(other, sizeof other, "%s/again.xlsx", f->dir);
    write_fixed(f->path);
    write_fixed(other);
    long n1, n2;
    char *a = slurp(f->path, &n1);
    char *b = slurp(other, &n2);
    assert_int_equal(n1, n2);
    assert_memory_equal(a, b, (size_t)n1);
    free(a);
    free(b);
}

/* Under a locale whose decimal mark is a comma, numbers must still be
 * written with a point. Skipped when no such locale is installed. */
static void test_writer_ignores_numeric_locale(void **state)
{
    fixture *f = *state;
    const char *const names[] = {"de_DE.UTF-8", "fr_FR.UTF-8", "nl_NL.UTF-8",
                                 "de_DE.utf8", NULL};
    const char *got = NULL;
    for (int i = 0; names[i] != NULL && got == NULL; i++)
        got = setlocale(LC_NUMERIC, names[i]);
    if (got == NULL) {
        skip();
        return;
    }
    write_small(f->path, 0, 1.5);
    setlocale(LC_NUMERIC, "C");
    read_back(f, f->path);
    assert_close(cell_number(f, "Summary", "A1"), 1.5, 1e-15, 0.0);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
#define T(fn) cmocka_unit_test_setup_teardown(fn, setup, teardown)
        T(test_writer_round_trips_cells),
        T(test_writer_formulas_keep_cached_values),
        T(test_writer_writes_text_as_text),
        T(test_writer_escapes_literal_x_sequences),
        T(test_writer_refuses_input_path),
        T(test_writer_refuses_foreign_file_without_force),
        T(test_writer_replaces_its_own_output),
        T(test_writer_refuses_a_folder_as_output),
        T(test_writer_open_fails_in_missing_folder),
        T(test_writer_failed_commit_leaves_nothing),
        T(test_writer_failed_rename_keeps_previous),
        T(test_writer_reports_library_write_failure),
        T(test_writer_abort_leaves_nothing),
        T(test_writer_recognises_only_its_files),
        T(test_writer_rejects_bad_sheet_names_quietly),
        T(test_writer_reports_rows_out_of_order),
        T(test_writer_reports_cells_beyond_the_sheet),
        T(test_writer_names_cells),
        T(test_writer_fixed_created_gives_identical_files),
        T(test_writer_ignores_numeric_locale),
#undef T
    };
    return cmocka_run_group_tests_name("writer", tests, NULL, NULL);
}
