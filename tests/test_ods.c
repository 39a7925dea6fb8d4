/*
 * test_ods.c: the .ods reader (io/ods.c). Fixtures made by LibreOffice
 * (tests/data/make_ods_fixtures.py) are compared cell by cell with their
 * CSV twins; small packages built here with minizip (zip.h) around a
 * hand-written content.xml provoke each rule and each error path.
 * Source of the rules: OpenDocument 1.2 part 1 (OASIS), 9.1.3-9.1.5
 * (table rows and cells), 19.385-19.389 (office:value-type and values),
 * 6.1.2-6.1.5 (white space, text:s, text:tab, text:line-break).
 */
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include <unistd.h>

#include <minizip/zip.h>

#include "testutil.h"

#include "../io/csv.h"
#include "../io/ods.h"

#define DATA "tests/data/"

#define HEAD "<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n" \
    "<office:document-content" \
    " xmlns:office=\"urn:oasis:names:tc:opendocument:xmlns:office:1.0\"" \
    " xmlns:table=\"urn:oasis:names:tc:opendocument:xmlns:table:1.0\"" \
    " xmlns:text=\"urn:oasis:names:tc:opendocument:xmlns:text:1.0\"" \
    " xmlns:draw=\"urn:oasis:names:tc:opendocument:xmlns:drawing:1.0\"" \
    " xmlns:calcext=\"urn:org:documentfoundation:names:experimental:calc:" \
    "xmlns:calcext:1.0\"><office:body><office:spreadsheet>"
#define TAIL "</office:spreadsheet></office:body></office:document-content>"
#define SHEET(name, rows) \
    "<table:table table:name=\"" name "\">" rows "</table:table>"
#define ROW(cells) "<table:table-row>" cells "</table:table-row>"
#define TXT(s) "<table:table-cell office:value-type=\"string\"><text:p>" s \
    "</text:p></table:table-cell>"
#define NUM(v) "<table:table-cell office:value-type=\"float\" " \
    "office:value=\"" v "\"/>"
#define HEADER2 ROW(TXT("a") TXT("b"))

/* ---- helpers ---------------------------------------------------------- */

static char path[64];

/* Writes a package holding content.xml (and a mimetype) to path. */
static void make_ods(const char *content)
{
    strcpy(path, "/tmp/test_ods_XXXXXX");
    int fd = mkstemp(path);
    assert_true(fd >= 0);
    close(fd);
    zipFile z = zipOpen64(path, APPEND_STATUS_CREATE);
    assert_non_null(z);
    static const char mt[] = "application/vnd.oasis.opendocument.spreadsheet";
    assert_int_equal(zipOpenNewFileInZip(z, "mimetype", NULL, NULL, 0, NULL,
                                         0, NULL, 0, 0), ZIP_OK);
    assert_int_equal(zipWriteInFileInZip(z, mt, sizeof mt - 1), ZIP_OK);
    assert_int_equal(zipCloseFileInZip(z), ZIP_OK);
    if (content != NULL) {
        assert_int_equal(zipOpenNewFileInZip(z, "content.xml", NULL, NULL,
                                             0, NULL, 0, NULL, Z_DEFLATED,
                                             6), ZIP_OK);
        assert_int_equal(zipWriteInFileInZip(z, content,
                                             (unsigned)strlen(content)),
                         ZIP_OK);
        assert_int_equal(zipCloseFileInZip(z), ZIP_OK);
    }
    assert_int_equal(zipClose(z, NULL), ZIP_OK);
}

static rf_status read_content(const char *content, const char *sheet,
                              uint32_t header, table **t, rf_error *e)
{
    make_ods(content);
    rf_warnings w = {0};
    memset(e, 0, sizeof *e);
    rf_status st = ods_read(path, "x.ods", sheet, header, t, &w, e);
    error_warnings_clear(&w);
    unlink(path);
    if (st != RF_OK)
        assert_null(*t);
    return st;
}

static table *read_ok(const char *content)
{
    table *t = NULL;
    rf_error e;
    rf_status st = read_content(content, NULL, 0, &t, &e);
    if (st != RF_OK)
        fail_msg("%s: %s", e.where, e.message);
    return t;
}

static void expect_error(const char *content, const char *where,
                         const char *fragment)
{
    table *t = NULL;
    rf_error e;
    assert_int_equal(read_content(content, NULL, 0, &t, &e), RF_EINPUT);
    if (strstr(e.message, fragment) == NULL)
        fail_msg("message '%s' lacks '%s'", e.message, fragment);
    if (strstr(e.where, where) == NULL)
        fail_msg("place '%s' lacks '%s'", e.where, where);
}

static int row_blank(const table *t, size_t r)
{
    for (size_t c = 0; c < table_cols(t); c++)
        if (table_cell_type(t, r, c) != CELL_BLANK)
            return 0;
    return 1;
}

static size_t next_row(const table *t, size_t r)
{
    while (r < table_rows(t) && row_blank(t, r))
        r++;
    return r;
}

/* Every cell of the .ods table equals the CSV twin's: columns matched by
 * name (a CSV column the .ods lacks must be blank: the grid makes no column
 * for a blank header over blank cells), non-blank rows in order. An .ods
 * error cell is the CSV's text of the same spelling. */
static void compare_twin(const table *o, const table *c)
{
    for (size_t j = 0; j < table_cols(o); j++)
        if (table_find_column(c, table_column_name(o, j)) < 0)
            fail_msg("column '%s' is not in the twin",
                     table_column_name(o, j));
    size_t compared = 0;
    for (size_t j = 0; j < table_cols(c); j++) {
        long k = table_find_column(o, table_column_name(c, j));
        if (k < 0) {
            assert_int_equal(table_column_kind(c, j), KIND_BLANK);
            continue;
        }
        size_t ro = next_row(o, 0), rc = next_row(c, 0);
        for (; ro < table_rows(o) && rc < table_rows(c);
             ro = next_row(o, ro + 1), rc = next_row(c, rc + 1)) {
            cell_type to = table_cell_type(o, ro, (size_t)k);
            cell_type tc = table_cell_type(c, rc, j);
            char where[128];
            table_where(o, ro, (size_t)k, where, sizeof where);
            if (to == CELL_ERROR) {
                assert_int_equal(tc, CELL_TEXT);
            } else if (to != tc) {
                fail_msg("%s: type %d, twin %d", where, (int)to, (int)tc);
            }
            if (to == CELL_TEXT || to == CELL_ERROR) {
                assert_string_equal(table_cell_text(o, ro, (size_t)k),
                                    table_cell_text(c, rc, j));
            } else if (to != CELL_BLANK) {
                assert_close(table_cell_number(o, ro, (size_t)k),
                             table_cell_number(c, rc, j), 1e-13, 1e-300);
            }
            compared++;
        }
        assert_int_equal(next_row(o, ro), table_rows(o));
        assert_int_equal(next_row(c, rc), table_rows(c));
    }
    assert_true(compared > 0);
}

static void check_twin(const char *ods, const char *sheet, uint32_t header,
                       const char *csv)
{
    table *o = NULL, *c = NULL;
    rf_warnings w = {0};
    rf_error e;
    memset(&e, 0, sizeof e);
    if (ods_read(ods, ods, sheet, header, &o, &w, &e) != RF_OK)
        fail_msg("%s: %s", e.where, e.message);
    csv_options opt = { ',', (int)header };
    if (csv_read(csv, csv, &opt, &c, &w, &e) != RF_OK)
        fail_msg("%s: %s", e.where, e.message);
    compare_twin(o, c);
    error_warnings_clear(&w);
    table_free(o);
    table_free(c);
}

/* ---- fixtures against their twins ------------------------------------- */

static void test_ods_types_match_csv_twin(void **state)
{
    (void)state;
    check_twin(DATA "ods-types.ods", NULL, 0, DATA "ods-types.csv");
}

static void test_ods_reads_value_types(void **state)
{
    (void)state;
    table *t = NULL;
    rf_warnings w = {0};
    rf_error e;
    assert_int_equal(ods_read(DATA "ods-types.ods", "types.ods", NULL, 0,
                              &t, &w, &e), RF_OK);
    assert_string_equal(table_sheet(t), "Sales");
    assert_int_equal(table_rows(t), 4);
    assert_int_equal(table_column_kind(t, 0), KIND_NUMBER);   /* float */
    assert_close(table_cell_number(t, 0, 1), 0.25, 1e-15, 0); /* 25 % */
    assert_int_equal(table_column_kind(t, 3), KIND_DATE);
    /* 2026-03-15 is serial 46096: 2024-01-01 = 45292 (libraries.md,
     * verified with libxlsxwriter) plus 366 + 365 + 73 days */
    assert_close(table_cell_number(t, 0, 3), 46096, 0, 0);
    assert_close(table_cell_number(t, 2, 3), 61, 0, 0);  /* 1900-03-01 */
    assert_close(table_cell_number(t, 0, 4), 46029 + 13.75 / 24, 1e-12, 0);
    assert_close(table_cell_number(t, 0, 5), 0.5208333333333334, 1e-15, 0);
    assert_int_equal(table_cell_type(t, 0, 7), CELL_ERROR);
    assert_string_equal(table_cell_text(t, 0, 7), "#DIV/0!");
    assert_string_equal(table_cell_text(t, 1, 6), "two\nlines");
    assert_close(table_cell_number(t, 1, 8), 374501.5, 0, 0);  /* cached */
    error_warnings_clear(&w);
    table_free(t);
}

static void test_ods_booleans_match_csv_twin(void **state)
{
    (void)state;
    check_twin(DATA "ods-booleans.ods", NULL, 0, DATA "ods-booleans.csv");
    table *t = NULL;
    rf_error e;
    rf_warnings w = {0};
    assert_int_equal(ods_read(DATA "ods-booleans.ods", "b.ods", NULL, 0, &t,
                              &w, &e), RF_OK);
    assert_int_equal(table_column_kind(t, 1), KIND_YESNO);
    assert_int_equal(table_cell_type(t, 1, 1), CELL_BOOL);
    assert_close(table_cell_number(t, 0, 2), 36.5 / 24, 1e-14, 0);
    /* the comment on D3 is not its value */
    assert_string_equal(table_cell_text(t, 1, 3), "line one\nline two");
    error_warnings_clear(&w);
    table_free(t);
}

static void test_ods_header_not_in_row_1_matches_twin(void **state)
{
    (void)state;
    check_twin(DATA "ods-header-row4.ods", NULL, 4,
               DATA "ods-header-row4.csv");
}

static void test_ods_picks_sheet_by_name_number_and_case(void **state)
{
    (void)state;
    check_twin(DATA "ods-sheets.ods", "Année 2025", 0,
               DATA "ods-sheets-2.csv");
    check_twin(DATA "ods-sheets.ods", "2", 0, DATA "ods-sheets-2.csv");
    check_twin(DATA "ods-sheets.ods", "ventes détaillées", 0,
               DATA "ods-sheets-3.csv");
    check_twin(DATA "ods-sheets.ods", "3", 0, DATA "ods-sheets-3.csv");
    table *t = NULL;
    rf_error e;
    rf_warnings w = {0};
    assert_int_equal(ods_read(DATA "ods-sheets.ods", "s.ods", "Année 2025",
                              0, &t, &w, &e), RF_OK);
    assert_string_equal(table_column_name(t, 1), "prix €");
    assert_string_equal(table_sheet(t), "Année 2025");
    error_warnings_clear(&w);
    table_free(t);
}

static void test_ods_unknown_sheet_lists_the_sheets(void **state)
{
    (void)state;
    table *t = NULL;
    rf_error e;
    assert_int_equal(ods_read(DATA "ods-sheets.ods", "s.ods", "Annee", 0,
                              &t, NULL, &e), RF_EINPUT);
    assert_null(t);
    assert_non_null(strstr(e.message, "'Summary', 'Année 2025', "
                                      "'Ventes détaillées'"));
    assert_string_equal(e.where, "s.ods");
    assert_int_equal(ods_read(DATA "ods-sheets.ods", "s.ods", "4", 0, &t,
                              NULL, &e), RF_EINPUT);
    assert_non_null(strstr(e.message, "no sheet 4"));
}

static void test_ods_sheets_gives_names_and_used_sizes(void **state)
{
    (void)state;
    grid_sheet *s = NULL;
    size_t n = 0;
    rf_error e;
    assert_int_equal(ods_sheets(DATA "ods-sheets.ods", "s.ods", &s, &n, &e),
                     RF_OK);
    assert_int_equal(n, 3);
    assert_string_equal(s[0].name, "Summary");
    assert_int_equal(s[0].rows, 2);
    assert_int_equal(s[0].cols, 1);
    assert_string_equal(s[1].name, "Année 2025");
    assert_int_equal(s[1].rows, 4);
    assert_int_equal(s[1].cols, 3);
    assert_string_equal(s[2].name, "Ventes détaillées");
    assert_int_equal(s[2].rows, 3);
    assert_int_equal(s[2].cols, 2);
    grid_sheets_free(s, n);
    /* styled empty cells far out (R40, Z2000, row 5000) are not used */
    assert_int_equal(ods_sheets(DATA "ods-sparse.ods", "p.ods", &s, &n, &e),
                     RF_OK);
    assert_int_equal(n, 1);
    assert_int_equal(s[0].rows, 5);
    assert_int_equal(s[0].cols, 12);
    grid_sheets_free(s, n);
}

static void test_ods_sparse_and_merged_header_match_twin(void **state)
{
    (void)state;
    check_twin(DATA "ods-sparse.ods", NULL, 0, DATA "ods-sparse.csv");
    table *t = NULL;
    rf_warnings w = {0};
    rf_error e;
    assert_int_equal(ods_read(DATA "ods-sparse.ods", "p.ods", NULL, 0, &t,
                              &w, &e), RF_OK);
    /* C1:D1 merged: "place" once, D's header blank -> named, warned */
    assert_true(table_find_column(t, "place") >= 0);
    assert_true(table_find_column(t, "column D") >= 0);
    assert_int_equal(w.n, 1);
    assert_non_null(strstr(w.items[0], "p.ods[Sparse]!D1"));
    assert_int_equal(table_rows(t), 3);   /* row 4 blank, 40.. styled */
    error_warnings_clear(&w);
    table_free(t);
}

/* ---- rules, on hand-made content.xml ---------------------------------- */

static void test_ods_huge_blank_repeats_cost_nothing(void **state)
{
    (void)state;
    clock_t t0 = clock();
    table *t = read_ok(HEAD SHEET("S", HEADER2
        "<table:table-row table:number-rows-repeated=\"1048000\">"
        "<table:table-cell table:number-columns-repeated=\"16384\"/>"
        "</table:table-row>"
        ROW(NUM("1") NUM("2")
            "<table:table-cell table:number-columns-repeated=\"16000\"/>")
        "<table:table-row table:number-rows-repeated=\"4000000000000\">"
        "<table:table-cell table:number-columns-repeated=\"99999999999\"/>"
        "</table:table-row>") TAIL);
    double secs = (double)(clock() - t0) / CLOCKS_PER_SEC;
    assert_int_equal(table_rows(t), 1);
    assert_int_equal(table_row_source(t, 0), 1048002);
    assert_true(secs < 1.0);   /* expanding them would take minutes */
    table_free(t);
}

static void test_ods_repeated_value_rows_and_cells_expand(void **state)
{
    (void)state;
    table *t = read_ok(HEAD SHEET("S", ROW(TXT("a") TXT("b") TXT("c"))
        "<table:table-row table:number-rows-repeated=\"3\">"
        "<table:table-cell table:number-columns-repeated=\"2\" "
        "office:value-type=\"float\" office:value=\"7.25\"/>"
        TXT("same") "</table:table-row>"
        ROW(NUM("8"))) TAIL);
    assert_int_equal(table_rows(t), 4);
    for (size_t r = 0; r < 3; r++) {
        assert_int_equal(table_row_source(t, r), r + 2);
        assert_close(table_cell_number(t, r, 0), 7.25, 0, 0);
        assert_close(table_cell_number(t, r, 1), 7.25, 0, 0);
        assert_string_equal(table_cell_text(t, r, 2), "same");
    }
    assert_int_equal(table_row_source(t, 3), 5);
    table_free(t);
}

static void test_ods_value_rows_past_the_row_limit_fail(void **state)
{
    (void)state;
    expect_error(HEAD SHEET("S", HEADER2
        "<table:table-row table:number-rows-repeated=\"1048575\">"
        "<table:table-cell/></table:table-row>"
        "<table:table-row table:number-rows-repeated=\"2\">" NUM("1")
        "</table:table-row>") TAIL, "x.ods[S]", "past the last row");
}

static void test_ods_value_cells_past_the_column_limit_fail(void **state)
{
    (void)state;
    expect_error(HEAD SHEET("S", HEADER2 ROW(
        "<table:table-cell table:number-columns-repeated=\"16383\"/>"
        "<table:table-cell table:number-columns-repeated=\"2\" "
        "office:value-type=\"float\" office:value=\"1\"/>")) TAIL,
        "x.ods[S]", "past the last column");
}

static void test_ods_repeat_amplification_is_capped(void **state)
{
    (void)state;
    expect_error(HEAD SHEET("S", HEADER2
        "<table:table-row table:number-rows-repeated=\"1000000\">"
        "<table:table-cell table:number-columns-repeated=\"100\" "
        "office:value-type=\"float\" office:value=\"1\"/>"
        "</table:table-row>") TAIL, "x.ods[S]!A2", "repeated cells");
}

static void test_ods_paragraph_text_rules(void **state)
{
    (void)state;
    table *t = read_ok(HEAD SHEET("S", ROW(TXT("t"))
        ROW(TXT("a<text:s text:c=\"3\"/>b<text:tab/>c<text:line-break/>d"))
        ROW("<table:table-cell office:value-type=\"string\">"
            "<text:p>  one \n\t  <text:span>two</text:span>  </text:p>"
            "<text:p/><text:p>x<text:s/></text:p></table:table-cell>")
        ROW("<table:table-cell><office:annotation><text:p>note</text:p>"
            "</office:annotation><text:p>plain</text:p>"
            "<draw:frame><text:p>pic</text:p></draw:frame>"
            "</table:table-cell>")
        ROW("<table:table-cell office:value-type=\"string\" "
            "office:string-value=\"from attribute\"><text:p>shown</text:p>"
            "</table:table-cell>")
        ROW("<table:table-cell office:value-type=\"void\">"
            "<text:p>later type</text:p></table:table-cell>")
        ROW("<table:table-cell><text:list><text:list-item><text:p>i1"
            "</text:p></text:list-item><text:list-item><text:p>i2</text:p>"
            "</text:list-item></text:list></table:table-cell>")) TAIL);
    assert_string_equal(table_cell_text(t, 0, 0), "a   b\tc\nd");
    /* 6.1.2: runs of white space are one space, none at the start */
    assert_string_equal(table_cell_text(t, 1, 0), "one two \n\nx ");
    assert_string_equal(table_cell_text(t, 2, 0), "plain");
    assert_string_equal(table_cell_text(t, 3, 0), "from attribute");
    assert_string_equal(table_cell_text(t, 4, 0), "later type");
    assert_string_equal(table_cell_text(t, 5, 0), "i1\ni2");
    table_free(t);
}

static void test_ods_error_cells(void **state)
{
    (void)state;
    table *t = read_ok(HEAD SHEET("S", ROW(TXT("e"))
        ROW("<table:table-cell table:formula=\"of:=1/0\" "
            "office:value-type=\"string\" office:string-value=\"\" "
            "calcext:value-type=\"error\"><text:p>#DIV/0!</text:p>"
            "</table:table-cell>")
        ROW("<table:table-cell table:formula=\"of:=NA()\" "
            "office:value-type=\"string\"><text:p>#N/A</text:p>"
            "</table:table-cell>")
        ROW("<table:table-cell table:formula=\"of:=SQRT(-1)\">"
            "<text:p>Err:502</text:p></table:table-cell>")
        ROW(TXT("#N/A"))
        ROW("<table:table-cell calcext:value-type=\"error\"/>")) TAIL);
    assert_int_equal(table_cell_type(t, 0, 0), CELL_ERROR);
    assert_string_equal(table_cell_text(t, 0, 0), "#DIV/0!");
    assert_int_equal(table_cell_type(t, 1, 0), CELL_ERROR);
    assert_int_equal(table_cell_type(t, 2, 0), CELL_ERROR);
    assert_string_equal(table_cell_text(t, 2, 0), "Err:502");
    /* typed in by a user, not a formula's result: text */
    assert_int_equal(table_cell_type(t, 3, 0), CELL_TEXT);
    assert_int_equal(table_cell_type(t, 4, 0), CELL_ERROR);
    table_free(t);
}

static void test_ods_dates_times_and_the_null_date(void **state)
{
    (void)state;
#define DATE(v) "<table:table-cell office:value-type=\"date\" " \
    "office:date-value=\"" v "\"><text:p>shown " v "</text:p>" \
    "</table:table-cell>"
#define TIME(v) "<table:table-cell office:value-type=\"time\" " \
    "office:time-value=\"" v "\"/>"
    table *t = read_ok(HEAD
        "<table:calculation-settings><table:null-date "
        "table:date-value=\"1904-01-01\"/></table:calculation-settings>"
        SHEET("S", ROW(TXT("d") TXT("t"))
        ROW(DATE("2024-01-01") TIME("PT12H30M00S"))
        ROW(DATE("2024-01-01T18:00:00.5Z") TIME("-PT6H"))
        ROW(DATE("1850-06-01") TIME("P1DT12H"))
        ROW(DATE("1900-01-01T00:00:00+02:00") TIME("PT0.5S"))) TAIL);
    /* the file stores calendar dates: the 1904 null date changes nothing;
     * 2024-01-01 = 45292 (libraries.md, verified with libxlsxwriter) */
    assert_int_equal(table_cell_type(t, 0, 0), CELL_DATE);
    assert_close(table_cell_number(t, 0, 0), 45292, 0, 0);
    assert_close(table_cell_number(t, 1, 0), 45292.75 + 0.5 / 86400, 1e-15,
                 0);
    /* before 1900: no serial; kept as the text the cell shows */
    assert_int_equal(table_cell_type(t, 2, 0), CELL_TEXT);
    assert_string_equal(table_cell_text(t, 2, 0), "shown 1850-06-01");
    assert_close(table_cell_number(t, 3, 0), 1, 0, 0);
    assert_close(table_cell_number(t, 0, 1), 12.5 / 24, 1e-15, 0);
    assert_close(table_cell_number(t, 1, 1), -0.25, 1e-15, 0);
    assert_close(table_cell_number(t, 2, 1), 1.5, 1e-15, 0);
    assert_close(table_cell_number(t, 3, 1), 0.5 / 86400, 1e-12, 0);
    table_free(t);
}

static void test_ods_unreadable_values_fail_with_the_cell(void **state)
{
    (void)state;
    expect_error(HEAD SHEET("S", HEADER2 ROW(NUM("1")
        "<table:table-cell office:value-type=\"float\" "
        "office:value=\"1,5\"/>")) TAIL, "x.ods[S]!B2", "not a number");
    expect_error(HEAD SHEET("S", HEADER2 ROW(
        "<table:table-cell office:value-type=\"currency\"/>")) TAIL,
        "x.ods[S]!A2", "(missing)");
    expect_error(HEAD SHEET("S", HEADER2 ROW(DATE("2026-02-30"))) TAIL,
                 "x.ods[S]!A2", "not a date");
    expect_error(HEAD SHEET("S", HEADER2 ROW(DATE("15.03.2026"))) TAIL,
                 "x.ods[S]!A2", "not a date");
    expect_error(HEAD SHEET("S", HEADER2 ROW(DATE("2026-03-15T25:00:00")))
                 TAIL, "x.ods[S]!A2", "not a date");
    expect_error(HEAD SHEET("S", HEADER2 ROW(TIME("P1M"))) TAIL,
                 "x.ods[S]!A2", "not a duration");
    expect_error(HEAD SHEET("S", HEADER2 ROW(TIME("12:30"))) TAIL,
                 "x.ods[S]!A2", "not a duration");
    expect_error(HEAD SHEET("S", HEADER2 ROW(
        "<table:table-cell office:value-type=\"boolean\" "
        "office:boolean-value=\"yes\"/>")) TAIL, "x.ods[S]!A2",
        "neither true nor false");
}

static void test_ods_covered_cells_and_nested_tables_are_blank(void **state)
{
    (void)state;
    table *t = read_ok(HEAD SHEET("S",
        ROW("<table:table-cell table:number-columns-spanned=\"2\" "
            "office:value-type=\"string\"><text:p>wide</text:p>"
            "</table:table-cell><table:covered-table-cell "
            "office:value-type=\"float\" office:value=\"9\"><text:p>9"
            "</text:p></table:covered-table-cell>" TXT("c"))
        ROW(NUM("1") NUM("2")
            "<table:table-cell><table:table><table:table-row>" NUM("5")
            "</table:table-row></table:table><text:p>outer</text:p>"
            "</table:table-cell>")) TAIL);
    /* B1 is covered: its 9 is not a header; B2 makes "column B" */
    assert_int_equal(table_cols(t), 3);
    assert_string_equal(table_column_name(t, 0), "wide");
    long b = table_find_column(t, "column B");
    long c = table_find_column(t, "c");
    assert_true(b >= 0 && c >= 0);
    assert_close(table_cell_number(t, 0, (size_t)b), 2, 0, 0);
    assert_string_equal(table_cell_text(t, 0, (size_t)c), "outer");
    table_free(t);
}

static void test_ods_header_rows_and_row_groups_are_read(void **state)
{
    (void)state;
    table *t = read_ok(HEAD SHEET("S",
        "<table:table-header-rows>" ROW(TXT("h")) "</table:table-header-rows>"
        "<table:table-row-group>" ROW(NUM("1")) ROW(NUM("2"))
        "</table:table-row-group>") TAIL);
    assert_int_equal(table_rows(t), 2);
    assert_close(table_cell_number(t, 1, 0), 2, 0, 0);
    table_free(t);
}

static void test_ods_text_past_the_cap_fails(void **state)
{
    (void)state;
    expect_error(HEAD SHEET("S", HEADER2 ROW(
        "<table:table-cell><text:p>a<text:s text:c=\"2000000000\"/>"
        "</text:p></table:table-cell>")) TAIL, "x.ods[S]!A2",
        "bytes of text");
}

static void test_ods_not_a_spreadsheet_fails(void **state)
{
    (void)state;
    expect_error("<office:document-content xmlns:office=\"urn:oasis:names:"
                 "tc:opendocument:xmlns:office:1.0\"><office:body>"
                 "<office:text/></office:body></office:document-content>",
                 "x.ods: part content.xml", "not a spreadsheet");
}

static void test_ods_without_sheets_fails(void **state)
{
    (void)state;
    expect_error(HEAD TAIL, "x.ods", "no sheets");
    /* a sheet with no cells: the grid finds no header */
    table *t = NULL;
    rf_error e;
    assert_int_equal(read_content(HEAD SHEET("Empty", "") TAIL, NULL, 0, &t,
                                  &e), RF_EINPUT);
}

static void test_ods_too_many_sheets_fail(void **state)
{
    (void)state;
    size_t n = 10001;
    const char *one = "<table:table table:name=\"s\"/>";
    size_t len = strlen(HEAD) + n * strlen(one) + strlen(TAIL) + 1;
    char *doc = malloc(len);
    assert_non_null(doc);
    strcpy(doc, HEAD);
    char *p = doc + strlen(doc);
    for (size_t i = 0; i < n; i++, p += strlen(one))
        memcpy(p, one, strlen(one));
    strcpy(p, TAIL);
    table *t = NULL;
    rf_error e;
    /* a sheet by name makes the reader go through them all */
    assert_int_equal(read_content(doc, "nope", 0, &t, &e), RF_EINPUT);
    assert_non_null(strstr(e.message, "more than 10000 sheets"));
    free(doc);
}

static void test_ods_missing_content_fails(void **state)
{
    (void)state;
    make_ods(NULL);
    table *t = NULL;
    rf_error e;
    assert_int_equal(ods_read(path, "x.ods", NULL, 0, &t, NULL, &e),
                     RF_EINPUT);
    assert_non_null(strstr(e.where, "content.xml"));
    grid_sheet *s = NULL;
    size_t n = 9;
    assert_int_equal(ods_sheets(path, "x.ods", &s, &n, &e), RF_EINPUT);
    assert_null(s);
    assert_int_equal(n, 0);
    unlink(path);
}

static void test_ods_bad_files_fail_naming_the_part(void **state)
{
    (void)state;
    table *t = NULL;
    rf_error e;
    assert_int_equal(ods_read("tests/bad/ods-malformed.ods", "m.ods", NULL,
                              0, &t, NULL, &e), RF_EINPUT);
    assert_non_null(strstr(e.where, "m.ods: part content.xml"));
    assert_non_null(strstr(e.message, "malformed XML"));
    assert_int_equal(ods_read("tests/bad/ods-doctype.ods", "d.ods", NULL, 0,
                              &t, NULL, &e), RF_EINPUT);
    assert_non_null(strstr(e.message, "DOCTYPE"));
    assert_int_equal(ods_read(DATA "ods-types.csv", "t.ods", NULL, 0, &t,
                              NULL, &e), RF_EINPUT);   /* not a zip */
    assert_int_equal(ods_read("tests/data/no-such.ods", "n.ods", NULL, 0,
                              &t, NULL, &e), RF_ESYSTEM);
    grid_sheet *s = NULL;
    size_t n = 0;
    assert_int_equal(ods_sheets("tests/data/no-such.ods", "n.ods", &s, &n,
                                &e), RF_ESYSTEM);
    assert_null(t);
}

static void test_ods_later_sheet_stops_reading_early(void **state)
{
    (void)state;
    /* sheet 1 is read and the malformed tail after it is never parsed */
    table *t = NULL;
    rf_error e;
    assert_int_equal(read_content(HEAD SHEET("One", ROW(TXT("a")) ROW(NUM("1")))
                                  "<table:table table:name=\"Two\"><oops>",
                                  NULL, 0, &t, &e), RF_OK);
    assert_int_equal(table_rows(t), 1);
    table_free(t);
    t = NULL;
    assert_int_equal(read_content(HEAD SHEET("One", ROW(TXT("a")))
                                  SHEET("Two", ROW(TXT("b")) ROW(NUM("4")))
                                  TAIL, "two", 0, &t, &e), RF_OK);
    assert_string_equal(table_column_name(t, 0), "b");
    table_free(t);
}

/* What io/ods.c gives a formula with no saved result (its
 * ODS_FORMULA_UNSAVED; the family of io/xls.c's #FORMULA reason). A
 * program that does not calculate writes table:formula with no
 * office:value-type and no text (OpenDocument 1.2 part 1, 19.385: the
 * value type is what says a cell has a value). */
#define UNSAVED "#FORMULA: this formula has no saved result (the file was " \
    "written by a program that does not calculate); open it in a " \
    "spreadsheet program and save it"
#define FORMULA(f) "<table:table-cell table:formula=\"" f "\"/>"

static void test_ods_formula_without_saved_result_is_error(void **state)
{
    (void)state;
    table *t = read_ok(HEAD SHEET("S", HEADER2
        ROW(NUM("1") FORMULA("of:=[.A2]*2"))
        ROW(FORMULA("of:=[.A2]+1") FORMULA("of:=[.B2]"))
        ROW(NUM("2") "<table:table-cell table:formula=\"of:=[.A4]\">"
            "<text:p>2</text:p></table:table-cell>")) TAIL);
    assert_int_equal(table_cell_type(t, 0, 1), CELL_ERROR);
    assert_string_equal(table_cell_text(t, 0, 1), UNSAVED);
    /* a row holding only such formulas is kept, not dropped as blank */
    assert_int_equal(table_rows(t), 3);
    assert_int_equal(table_row_source(t, 1), 3);
    assert_int_equal(table_cell_type(t, 1, 0), CELL_ERROR);
    assert_string_equal(table_cell_text(t, 1, 0), UNSAVED);
    assert_int_equal(table_cell_type(t, 1, 1), CELL_ERROR);
    /* a formula that shows a result without a type keeps what it shows */
    assert_int_equal(table_cell_type(t, 2, 1), CELL_TEXT);
    assert_close(table_cell_number(t, 2, 0), 2, 0, 0);
    table_free(t);
}

static void test_ods_sheets_counts_unsaved_formulas_as_used(void **state)
{
    (void)state;
    make_ods(HEAD SHEET("S", HEADER2 ROW(NUM("1"))
        "<table:table-row table:number-rows-repeated=\"3\">"
        "<table:table-cell/></table:table-row>"
        ROW("<table:table-cell table:number-columns-repeated=\"2\"/>"
            FORMULA("of:=[.A2]*2"))) TAIL);
    grid_sheet *s = NULL;
    size_t n = 0;
    rf_error e;
    rf_status st = ods_sheets(path, "x.ods", &s, &n, &e);
    unlink(path);
    assert_int_equal(st, RF_OK);
    assert_int_equal(n, 1);
    assert_int_equal(s[0].rows, 6);
    assert_int_equal(s[0].cols, 3);
    grid_sheets_free(s, n);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_ods_types_match_csv_twin),
        cmocka_unit_test(test_ods_reads_value_types),
        cmocka_unit_test(test_ods_booleans_match_csv_twin),
        cmocka_unit_test(test_ods_header_not_in_row_1_matches_twin),
        cmocka_unit_test(test_ods_picks_sheet_by_name_number_and_case),
        cmocka_unit_test(test_ods_unknown_sheet_lists_the_sheets),
        cmocka_unit_test(test_ods_sheets_gives_names_and_used_sizes),
        cmocka_unit_test(test_ods_sparse_and_merged_header_match_twin),
        cmocka_unit_test(test_ods_huge_blank_repeats_cost_nothing),
        cmocka_unit_test(test_ods_repeated_value_rows_and_cells_expand),
        cmocka_unit_test(test_ods_value_rows_past_the_row_limit_fail),
        cmocka_unit_test(test_ods_value_cells_past_the_column_limit_fail),
        cmocka_unit_test(test_ods_repeat_amplification_is_capped),
        cmocka_unit_test(test_ods_paragraph_text_rules),
        cmocka_unit_test(test_ods_error_cells),
        cmocka_unit_test(test_ods_dates_times_and_the_null_date),
        cmocka_unit_test(test_ods_unreadable_values_fail_with_the_cell),
        cmocka_unit_test(test_ods_covered_cells_and_nested_tables_are_blank),
        cmocka_unit_test(test_ods_header_rows_and_row_groups_are_read),
        cmocka_unit_test(test_ods_text_past_the_cap_fails),
        cmocka_unit_test(test_ods_not_a_spreadsheet_fails),
        cmocka_unit_test(test_ods_without_sheets_fails),
        cmocka_unit_test(test_ods_too_many_sheets_fail),
        cmocka_unit_test(test_ods_missing_content_fails),
        cmocka_unit_test(test_ods_bad_files_fail_naming_the_part),
        cmocka_unit_test(test_ods_later_sheet_stops_reading_early),
        cmocka_unit_test(test_ods_formula_without_saved_result_is_error),
        cmocka_unit_test(test_ods_sheets_counts_unsaved_formulas_as_used),
    };
    return cmocka_run_group_tests_name("ods", tests, NULL, NULL);
}
