/*
 * test_xlsx.c: the .xlsx reader. Each committed fixture (tests/data/, made
 * by openpyxl, LibreOffice and by hand: tests/data/README.md) is read and
 * compared cell by cell with its CSV twin read by the CSV reader; then
 * dates in both systems, error cells, booleans, sheet choice, the sheet
 * list, and every error path, on small packages written per test
 * (tests/ziptest.h). Run from the top folder (fixture paths are relative).
 */
#include "testutil.h"

#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "../io/csv.h"
#include "../io/xlsx.h"
#include "ziptest.h"

#define DATA "tests/data/"

typedef struct fixture {
    char dir[64];
    char path[128];
    rf_warnings warn;
    rf_error err;
    table *t;
} fixture;

static int setup(void **state)
{
    fixture *f = calloc(1, sizeof *f);
    if (f == NULL)
        return -1;
    snprintf(f->dir, sizeof f->dir, "/tmp/rowfit-xlsx-XXXXXX");
    if (mkdtemp(f->dir) == NULL) {
        free(f);
        return -1;
    }
    snprintf(f->path, sizeof f->path, "%s/book.xlsx", f->dir);
    *state = f;
    return 0;
}

static int teardown(void **state)
{
    fixture *f = *state;
    table_free(f->t);
    error_warnings_clear(&f->warn);
    unlink(f->path);
    rmdir(f->dir);
    free(f);
    return 0;
}

static rf_status read_book(fixture *f, const char *path, const char *sheet,
                           uint32_t header)
{
    table_free(f->t);
    f->t = NULL;
    memset(&f->err, 0, sizeof f->err);
    const char *name = strrchr(path, '/') ? strrchr(path, '/') + 1 : path;
    rf_status st = xlsx_read(path, name, sheet, header, &f->t, &f->warn,
                             &f->err);
    if (st != RF_OK) {
        assert_null(f->t);
        assert_true(f->err.message[0] != '\0');
    }
    return st;
}

/* ---- the CSV twins ---------------------------------------------------- */

/* Reads the sheet and its CSV twin and compares shape, names and every
 * cell. An error cell in the workbook is text in the CSV ("#N/A"). */
static void compare_twin(const char *book, const char *sheet,
                         uint32_t header, const char *twin)
{
    table *x = NULL, *c = NULL;
    rf_warnings w = {0};
    rf_error e;
    csv_options opt = {',', 0};
    memset(&e, 0, sizeof e);
    if (xlsx_read(book, "book.xlsx", sheet, header, &x, &w, &e) != RF_OK)
        fail_msg("%s: %s: %s", book, e.where, e.message);
    if (csv_read(twin, "twin.csv", &opt, &c, &w, &e) != RF_OK)
        fail_msg("%s: %s: %s", twin, e.where, e.message);
    assert_int_equal(table_cols(x), table_cols(c));
    assert_int_equal(table_rows(x), table_rows(c));
    for (size_t j = 0; j < table_cols(x); j++)
        assert_string_equal(table_column_name(x, j),
                            table_column_name(c, j));
    for (size_t i = 0; i < table_rows(x); i++)
        for (size_t j = 0; j < table_cols(x); j++) {
            cell_type a = table_cell_type(x, i, j);
            cell_type b = table_cell_type(c, i, j);
            char where[128];
            table_where(x, i, j, where, sizeof where);
            if (a == CELL_ERROR && b == CELL_TEXT) {
                assert_string_equal(table_cell_text(x, i, j),
                                    table_cell_text(c, i, j));
                continue;
            }
            if (a != b)
                fail_msg("%s: type %d, twin has %d", where, a, b);
            if (a == CELL_TEXT || a == CELL_ERROR)
                assert_string_equal(table_cell_text(x, i, j),
                                    table_cell_text(c, i, j));
            else if (a != CELL_BLANK)
                /* LibreOffice writes 15 significant digits, the twin 17;
                 * times of day are whole seconds (1.2e-5 days) */
                assert_close(table_cell_number(x, i, j),
                             table_cell_number(c, i, j), 1e-14, 1e-9);
        }
    table_free(x);
    table_free(c);
    error_warnings_clear(&w);
}

static void test_xlsx_openpyxl_types_match_csv_twin(void **state)
{
    (void)state;
    compare_twin(DATA "xlsx-types.xlsx", "Sales", 0,
                 DATA "xlsx-types-Sales.csv");
}

static void test_xlsx_header_below_row1_non_ascii_match_twin(void **state)
{
    (void)state;
    compare_twin(DATA "xlsx-types.xlsx", "Größe €", 4,
                 DATA "xlsx-types-Groesse.csv");
}

static void test_xlsx_1904_workbook_matches_csv_twin(void **state)
{
    (void)state;
    compare_twin(DATA "xlsx-1904.xlsx", NULL, 0, DATA "xlsx-1904.csv");
}

static void test_xlsx_libreoffice_formulas_match_csv_twin(void **state)
{
    (void)state;
    compare_twin(DATA "xlsx-formulas.xlsx", NULL, 0,
                 DATA "xlsx-formulas.csv");
}

static void test_xlsx_inline_rich_and_unnumbered_match_twin(void **state)
{
    (void)state;
    compare_twin(DATA "xlsx-hand.xlsx", "Hand", 0, DATA "xlsx-hand.csv");
}

/* ---- values checked one by one ------------------------------------------ */

/* Serials: 2024-01-01 = 45292, 1900-02-28 = 59, 1900-03-01 = 61 (the
 * phantom 1900-02-29 is 60), check values verified with libxlsxwriter's
 * converter (libraries.md, spreadsheet file facts). */
static void test_xlsx_dates_are_1900_serials(void **state)
{
    fixture *f = *state;
    assert_int_equal(read_book(f, DATA "xlsx-types.xlsx", "Sales", 0),
                     RF_OK);
    long sold = table_find_column(f->t, "sold");
    assert_true(sold >= 0);
    assert_int_equal(table_column_kind(f->t, (size_t)sold), KIND_DATE);
    assert_int_equal(table_cell_type(f->t, 0, (size_t)sold), CELL_DATE);
    assert_close(table_cell_number(f->t, 0, (size_t)sold), 45292, 0, 0);
    assert_close(table_cell_number(f->t, 1, (size_t)sold), 59, 0, 0);
    assert_close(table_cell_number(f->t, 2, (size_t)sold), 61, 0, 0);
    long listed = table_find_column(f->t, "listed");
    /* 2023-11-20 09:30 = 45250 + 9.5/24 */
    assert_close(table_cell_number(f->t, 0, (size_t)listed),
                 45250 + 9.5 / 24, 1e-15, 0);
}

/* The 1904 system stores 2024-01-01 as 43830 (libraries.md check value);
 * the reader gives the 1900 serial 45292. */
static void test_xlsx_1904_serials_are_converted(void **state)
{
    fixture *f = *state;
    assert_int_equal(read_book(f, DATA "xlsx-1904.xlsx", NULL, 0), RF_OK);
    assert_int_equal(table_cell_type(f->t, 0, 0), CELL_DATE);
    assert_close(table_cell_number(f->t, 0, 0), 45292, 0, 0);
    /* 1904-01-02 12:00 = 1462 + 1.5 */
    assert_close(table_cell_number(f->t, 1, 0), 1463.5, 1e-15, 0);
}

static void test_xlsx_error_cells_keep_their_text(void **state)
{
    fixture *f = *state;
    assert_int_equal(read_book(f, DATA "xlsx-formulas.xlsx", NULL, 0),
                     RF_OK);
    long bad = table_find_column(f->t, "bad");
    assert_int_equal(table_cell_type(f->t, 2, (size_t)bad), CELL_ERROR);
    assert_string_equal(table_cell_text(f->t, 2, (size_t)bad), "#DIV/0!");
    long missing = table_find_column(f->t, "missing");
    assert_string_equal(table_cell_text(f->t, 0, (size_t)missing), "#N/A");
    long big = table_find_column(f->t, "big");
    assert_int_equal(table_cell_type(f->t, 0, (size_t)big), CELL_BOOL);
    assert_close(table_cell_number(f->t, 0, (size_t)big), 1, 0, 0);
    assert_int_equal(table_column_kind(f->t, (size_t)big), KIND_YESNO);
}

static void test_xlsx_rows_keep_their_sheet_numbers(void **state)
{
    fixture *f = *state;
    assert_int_equal(read_book(f, DATA "xlsx-types.xlsx", "2", 4), RF_OK);
    assert_string_equal(table_column_name(f->t, 0), "Straße");
    assert_int_equal(table_row_source(f->t, 0), 5);
    assert_int_equal(table_row_source(f->t, 2), 8);  /* row 7 is blank */
    char where[128];
    table_where(f->t, 1, 2, where, sizeof where);
    assert_string_equal(where, "xlsx-types.xlsx[Größe €]!C6");
}

static void test_xlsx_wrong_sheet_name_lists_sheets(void **state)
{
    fixture *f = *state;
    assert_int_equal(read_book(f, DATA "xlsx-types.xlsx", "Sale", 0),
                     RF_EINPUT);
    assert_non_null(strstr(f->err.message, "Sales"));
    assert_non_null(strstr(f->err.message, "Größe €"));
}

static void test_xlsx_sheets_lists_names_and_used_size(void **state)
{
    (void)state;
    grid_sheet *s = NULL;
    size_t n = 0;
    rf_error e;
    assert_int_equal(xlsx_sheets(DATA "xlsx-types.xlsx", "t.xlsx", &s, &n,
                                 &e), RF_OK);
    assert_int_equal(n, 2);
    assert_string_equal(s[0].name, "Sales");
    assert_int_equal(s[0].rows, 6);
    assert_int_equal(s[0].cols, 7);
    assert_string_equal(s[1].name, "Größe €");
    assert_int_equal(s[1].rows, 9);
    assert_int_equal(s[1].cols, 4);
    grid_sheets_free(s, n);
}

/* ---- packages written per test ------------------------------------------ */

#define NS "xmlns=\"http://schemas.openxmlformats.org/spreadsheetml/" \
           "2006/main\""
#define REL "http://schemas.openxmlformats.org/officeDocument/2006/" \
            "relationships"

/* A one-sheet workbook "S" whose sheet part holds `data` inside
 * <sheetData>; sst is the shared-string part's <si> items or NULL; styles
 * the styles part's content inside <styleSheet>, or NULL. */
static void write_styled_book(fixture *f, const char *dimension,
                              const char *data, const char *sst,
                              const char *styles)
{
    zipFile zf = zt_create(f->path);
    zt_add_text(zf, "_rels/.rels",
                "<Relationships xmlns=\"http://schemas.openxmlformats.org/"
                "package/2006/relationships\"><Relationship Id=\"r1\" "
                "Type=\"" REL "/officeDocument\" Target=\"xl/workbook.xml\"/>"
                "</Relationships>");
    zt_add_text(zf, "xl/workbook.xml",
                "<workbook " NS " xmlns:r=\"" REL "\"><sheets>"
                "<sheet name=\"S\" sheetId=\"1\" r:id=\"rId1\"/>"
                "<sheet name=\"Chart\" sheetId=\"2\" r:id=\"rId2\"/>"
                "<sheet name=\"Lost\" sheetId=\"3\" r:id=\"rId9\"/>"
                "</sheets></workbook>");
    zt_add_text(zf, "xl/_rels/workbook.xml.rels",
                "<Relationships xmlns=\"http://schemas.openxmlformats.org/"
                "package/2006/relationships\">"
                "<Relationship Id=\"rId1\" Type=\"" REL "/worksheet\" "
                "Target=\"worksheets/s.xml\"/>"
                "<Relationship Id=\"rId2\" Type=\"" REL "/chartsheet\" "
                "Target=\"chartsheets/c.xml\"/>"
                "<Relationship Id=\"rId3\" Type=\"" REL "/sharedStrings\" "
                "Target=\"strings.xml\"/>"
                "<Relationship Id=\"rId4\" Type=\"" REL "/styles\" "
                "Target=\"styles.xml\"/></Relationships>");
    char *xml = malloc(strlen(data) + 512);
    assert_non_null(xml);
    sprintf(xml, "<worksheet " NS ">%s<sheetData>%s</sheetData></worksheet>",
            dimension ? dimension : "", data);
    zt_add_text(zf, "xl/worksheets/s.xml", xml);
    free(xml);
    if (sst != NULL) {
        char buf[4096];
        snprintf(buf, sizeof buf, "<sst " NS ">%s</sst>", sst);
        zt_add_text(zf, "xl/strings.xml", buf);
    }
    if (styles != NULL) {
        char *st = malloc(strlen(styles) + 128);
        assert_non_null(st);
        sprintf(st, "<styleSheet " NS ">%s</styleSheet>", styles);
        zt_add_text(zf, "xl/styles.xml", st);
        free(st);
    }
    zt_close(zf);
}

static void write_book(fixture *f, const char *dimension, const char *data,
                       const char *sst)
{
    write_styled_book(f, dimension, data, sst, NULL);
}

#define HEAD "<row r=\"1\"><c r=\"A1\" t=\"inlineStr\"><is><t>a</t></is></c>" \
             "<c r=\"B1\" t=\"inlineStr\"><is><t>b</t></is></c></row>"

/* Reads the per-test book's sheet S; on error checks the place. */
static rf_status read_s(fixture *f, const char *where)
{
    rf_status st = read_book(f, f->path, "S", 0);
    if (st != RF_OK && where != NULL)
        assert_string_equal(f->err.where, where);
    return st;
}

static void test_xlsx_cells_without_r_follow_the_previous(void **state)
{
    fixture *f = *state;
    write_book(f, NULL, HEAD "<row><c><v>1</v></c><c><v>2</v></c></row>"
                             "<row r=\"4\"><c r=\"B4\"><v>3</v></c></row>"
                             "<row><c><v>4</v></c></row>", NULL);
    assert_int_equal(read_s(f, NULL), RF_OK);
    assert_int_equal(table_rows(f->t), 3);
    assert_int_equal(table_row_source(f->t, 0), 2);
    assert_close(table_cell_number(f->t, 0, 1), 2, 0, 0);
    assert_int_equal(table_cell_type(f->t, 1, 0), CELL_BLANK);
    assert_close(table_cell_number(f->t, 1, 1), 3, 0, 0);
    assert_int_equal(table_row_source(f->t, 2), 5);
    assert_close(table_cell_number(f->t, 2, 0), 4, 0, 0);
}

static void test_xlsx_sheets_without_dimension_streams(void **state)
{
    fixture *f = *state;
    write_book(f, NULL, HEAD "<row r=\"7\"><c r=\"C7\"><v>1</v></c>"
                             "<c r=\"E7\"><v></v></c></row>", NULL);
    grid_sheet *s = NULL;
    size_t n = 0;
    assert_int_equal(xlsx_sheets(f->path, "book.xlsx", &s, &n, &f->err),
                     RF_OK);
    assert_int_equal(n, 3);
    assert_int_equal(s[0].rows, 7);
    assert_int_equal(s[0].cols, 3);  /* E7 has no value */
    assert_int_equal(s[1].rows, 0);  /* the chart sheet */
    grid_sheets_free(s, n);
}

static void test_xlsx_zip_that_is_not_a_workbook(void **state)
{
    fixture *f = *state;
    zipFile zf = zt_create(f->path);
    zt_add_text(zf, "notes.txt", "hello");
    zt_close(zf);
    assert_int_equal(read_book(f, f->path, NULL, 0), RF_EINPUT);
    assert_string_equal(f->err.where, "book.xlsx");
    assert_non_null(strstr(f->err.message, "not an .xlsx workbook"));
}

static void test_xlsx_chart_sheet_is_refused(void **state)
{
    fixture *f = *state;
    write_book(f, NULL, HEAD, NULL);
    assert_int_equal(read_book(f, f->path, "Chart", 0), RF_EINPUT);
    assert_non_null(strstr(f->err.message, "chart"));
    assert_int_equal(read_book(f, f->path, "Lost", 0), RF_EINPUT);
    assert_non_null(strstr(f->err.message, "no part"));
}

static void test_xlsx_bad_number_names_the_cell(void **state)
{
    fixture *f = *state;
    write_book(f, NULL, HEAD "<row r=\"2\"><c r=\"B2\"><v>1,5</v></c></row>",
               NULL);
    assert_int_equal(read_s(f, "book.xlsx[S]!B2"), RF_EINPUT);
    assert_non_null(strstr(f->err.message, "'1,5' is not a number"));
}

static void test_xlsx_shared_string_out_of_range(void **state)
{
    fixture *f = *state;
    write_book(f, NULL, HEAD "<row r=\"2\"><c r=\"A2\" t=\"s\"><v>1</v></c>"
                             "</row>", "<si><t>only</t></si>");
    assert_int_equal(read_s(f, "book.xlsx[S]!A2"), RF_EINPUT);
    assert_non_null(strstr(f->err.message, "does not exist"));
}

static void test_xlsx_unknown_cell_type(void **state)
{
    fixture *f = *state;
    write_book(f, NULL, HEAD "<row r=\"2\"><c r=\"A2\" t=\"q\"><v>1</v></c>"
                             "</row>", NULL);
    assert_int_equal(read_s(f, "book.xlsx[S]!A2"), RF_EINPUT);
    assert_non_null(strstr(f->err.message, "unknown cell type 'q'"));
}

static void test_xlsx_bad_reference_row_bool_date_style(void **state)
{
    fixture *f = *state;
    write_book(f, NULL, HEAD "<row r=\"2\"><c r=\"2A\"><v>1</v></c></row>",
               NULL);
    assert_int_equal(read_s(f, NULL), RF_EINPUT);
    assert_non_null(strstr(f->err.message, "not a cell reference"));
    write_book(f, NULL, HEAD "<row r=\"x\"></row>", NULL);
    assert_int_equal(read_s(f, "book.xlsx: part xl/worksheets/s.xml:1"),
                     RF_EINPUT);
    assert_non_null(strstr(f->err.message, "row number"));
    write_book(f, NULL, HEAD "<row r=\"2\"><c r=\"A2\" t=\"b\"><v>2</v></c>"
                             "</row>", NULL);
    assert_int_equal(read_s(f, "book.xlsx[S]!A2"), RF_EINPUT);
    assert_non_null(strstr(f->err.message, "yes-no"));
    write_book(f, NULL, HEAD "<row r=\"2\"><c r=\"A2\" t=\"d\"><v>2024-13-01"
                             "</v></c></row>", NULL);
    assert_int_equal(read_s(f, "book.xlsx[S]!A2"), RF_EINPUT);
    assert_non_null(strstr(f->err.message, "ISO 8601"));
    write_book(f, NULL, HEAD "<row r=\"2\"><c r=\"A2\" s=\"-1\"><v>1</v>"
                             "</c></row>", NULL);
    assert_int_equal(read_s(f, "book.xlsx[S]!A2"), RF_EINPUT);
    assert_non_null(strstr(f->err.message, "style"));
}

static void test_xlsx_cell_beyond_format_limits(void **state)
{
    fixture *f = *state;
    write_book(f, NULL, HEAD "<row r=\"2\"><c r=\"XFE2\"><v>1</v></c></row>",
               NULL);
    assert_int_equal(read_s(f, NULL), RF_EINPUT);
    write_book(f, NULL, HEAD "<row r=\"1048577\"><c><v>1</v></c></row>",
               NULL);
    assert_int_equal(read_s(f, NULL), RF_EINPUT);
}

/* A cell's text over 1 MiB: letters from a small LCG, so the part does
 * not compress past the ratio limit. */
static void test_xlsx_cell_text_over_limit(void **state)
{
    fixture *f = *state;
    size_t n = (size_t)1 << 20 | 16;
    char *data = malloc(n + 256);
    assert_non_null(data);
    int k = sprintf(data, HEAD "<row r=\"2\"><c r=\"A2\" t=\"str\"><v>");
    uint32_t x = 12345;
    for (size_t i = 0; i < n; i++) {
        x = x * 1103515245u + 12345u;
        data[k + (int)i] = (char)('a' + (x >> 16) % 26);
    }
    strcpy(data + k + n, "</v></c></row>");
    write_book(f, NULL, data, NULL);
    free(data);
    assert_int_equal(read_s(f, "book.xlsx[S]!A2"), RF_EINPUT);
    assert_non_null(strstr(f->err.message, "more than"));
}

static void test_xlsx_missing_sheet_part(void **state)
{
    fixture *f = *state;
    zipFile zf = zt_create(f->path);
    zt_add_text(zf, "xl/workbook.xml",
                "<workbook " NS " xmlns:r=\"" REL "\"><sheets>"
                "<sheet name=\"S\" sheetId=\"1\" r:id=\"rId1\"/>"
                "</sheets></workbook>");
    zt_add_text(zf, "xl/_rels/workbook.xml.rels",
                "<Relationships xmlns=\"http://schemas.openxmlformats.org/"
                "package/2006/relationships\">"
                "<Relationship Id=\"rId1\" Type=\"" REL "/worksheet\" "
                "Target=\"worksheets/gone.xml\"/></Relationships>");
    zt_close(zf);
    assert_int_equal(read_s(f, "book.xlsx: part xl/worksheets/gone.xml"),
                     RF_EINPUT);
    assert_non_null(strstr(f->err.message, "missing"));
}

static void test_xlsx_workbook_without_sheets(void **state)
{
    fixture *f = *state;
    zipFile zf = zt_create(f->path);
    zt_add_text(zf, "xl/workbook.xml", "<workbook " NS "><sheets/>"
                                       "</workbook>");
    zt_add_text(zf, "xl/_rels/workbook.xml.rels",
                "<Relationships xmlns=\"http://schemas.openxmlformats.org/"
                "package/2006/relationships\"/>");
    zt_close(zf);
    assert_int_equal(read_book(f, f->path, NULL, 0), RF_EINPUT);
    assert_non_null(strstr(f->err.message, "no sheets"));
}

/* The committed bad files (tests/bad/, made by make_xlsx_fixtures.py). */
static void test_xlsx_bad_files_are_refused(void **state)
{
    static const struct {
        const char *file, *fragment;
    } bad[] = {
        {"tests/bad/xlsx-truncated.xlsx", "truncated"},
        {"tests/bad/xlsx-not-a-workbook.xlsx", "not an .xlsx workbook"},
        {"tests/bad/xlsx-billion-laughs.xlsx", "DOCTYPE"},
        {"tests/bad/xlsx-bomb-declared.xlsx", "zip bomb"},
        {"tests/bad/xlsx-bomb-undeclared.xlsx", "corrupt or truncated part"},
    };
    fixture *f = *state;
    for (size_t i = 0; i < sizeof bad / sizeof bad[0]; i++) {
        if (read_book(f, bad[i].file, NULL, 0) != RF_EINPUT)
            fail_msg("%s was read", bad[i].file);
        if (strstr(f->err.message, bad[i].fragment) == NULL)
            fail_msg("%s: '%s' lacks '%s'", bad[i].file, f->err.message,
                     bad[i].fragment);
    }
}

/* ---- formulas without results, times of day, many styles ------------- */

/* What io/xlsx.c gives a formula with no saved result (its
 * XLSX_FORMULA_UNSAVED; the same family as io/xls.c's #FORMULA reason). */
#define UNSAVED "#FORMULA: this formula has no saved result (the file was " \
    "written by a program that does not calculate); open it in a " \
    "spreadsheet program and save it"

/* tests/data/xlsx-unsaved.xlsx is written by python3-openpyxl, which saves
 * formulas as <f> with an empty <v> (it does not calculate). */
static void test_xlsx_formula_without_saved_result_is_error(void **state)
{
    fixture *f = *state;
    assert_int_equal(read_book(f, DATA "xlsx-unsaved.xlsx", NULL, 0),
                     RF_OK);
    long dbl = table_find_column(f->t, "double");
    long lab = table_find_column(f->t, "label");
    assert_true(dbl >= 0 && lab >= 0);
    for (size_t i = 0; i < table_rows(f->t); i++) {
        assert_int_equal(table_cell_type(f->t, i, (size_t)dbl), CELL_ERROR);
        assert_string_equal(table_cell_text(f->t, i, (size_t)dbl), UNSAVED);
        assert_int_equal(table_cell_type(f->t, i, (size_t)lab), CELL_ERROR);
    }
    /* the plain values beside them still read */
    assert_close(table_cell_number(f->t, 0, 1), 100, 0, 0);
}

static void test_xlsx_row_of_only_unsaved_formulas_is_kept(void **state)
{
    fixture *f = *state;
    assert_int_equal(read_book(f, DATA "xlsx-unsaved.xlsx", NULL, 0),
                     RF_OK);
    /* rows 2, 3 (formulas only) and 4 of the sheet */
    assert_int_equal(table_rows(f->t), 3);
    assert_int_equal(table_row_source(f->t, 1), 3);
    assert_int_equal(table_cell_type(f->t, 1, 0), CELL_BLANK);
    assert_int_equal(table_cell_type(f->t, 1, 2), CELL_ERROR);
    assert_close(table_cell_number(f->t, 2, 0), 2, 0, 0);
}

static void test_xlsx_unsaved_formulas_count_as_used(void **state)
{
    fixture *f = *state;
    /* no <dimension>: measured by streaming. Row 6 holds only a formula
     * without <v>; an empty t="str" result stays blank, not unsaved. */
    write_book(f, NULL, HEAD "<row r=\"2\"><c r=\"A2\"><v>1</v></c></row>"
                             "<row r=\"6\"><c r=\"C6\"><f>A2*2</f></c>"
                             "</row>", NULL);
    grid_sheet *s = NULL;
    size_t n = 0;
    assert_int_equal(xlsx_sheets(f->path, "book.xlsx", &s, &n, &f->err),
                     RF_OK);
    assert_int_equal(s[0].rows, 6);
    assert_int_equal(s[0].cols, 3);
    grid_sheets_free(s, n);

    write_book(f, NULL, HEAD "<row r=\"2\"><c r=\"A2\"><v>1</v></c>"
                             "<c r=\"B2\" t=\"str\"><f>\"\"</f><v></v></c>"
                             "</row><row r=\"3\"><c r=\"B3\"><f>A2*2</f>"
                             "</c></row>", NULL);
    assert_int_equal(read_s(f, NULL), RF_OK);
    assert_int_equal(table_rows(f->t), 2);
    assert_int_equal(table_cell_type(f->t, 0, 1), CELL_BLANK);
    assert_int_equal(table_cell_type(f->t, 1, 1), CELL_ERROR);
    assert_string_equal(table_cell_text(f->t, 1, 1), UNSAVED);
}

/* Times of day are numbers (the fraction of a day), as the .ods and .xls
 * readers give them; a date-time stays a date. The fixture's E column has
 * the built-in format 21 (h:mm:ss), F "[h]:mm", G "hh:mm", H
 * "yyyy-mm-dd hh:mm" (openpyxl's style part). */
static void test_xlsx_time_only_formats_are_numbers(void **state)
{
    fixture *f = *state;
    assert_int_equal(read_book(f, DATA "xlsx-unsaved.xlsx", NULL, 0),
                     RF_OK);
    long at = table_find_column(f->t, "at");
    long span = table_find_column(f->t, "span");
    long clock = table_find_column(f->t, "clock");
    long when = table_find_column(f->t, "when");
    assert_true(at >= 0 && span >= 0 && clock >= 0 && when >= 0);
    assert_int_equal(table_cell_type(f->t, 0, (size_t)at), CELL_NUMBER);
    assert_close(table_cell_number(f->t, 0, (size_t)at), 0.5, 0, 0);
    assert_int_equal(table_column_kind(f->t, (size_t)at), KIND_NUMBER);
    assert_int_equal(table_cell_type(f->t, 0, (size_t)span), CELL_NUMBER);
    assert_close(table_cell_number(f->t, 0, (size_t)span), 1.5, 0, 0);
    assert_int_equal(table_cell_type(f->t, 2, (size_t)clock), CELL_NUMBER);
    assert_close(table_cell_number(f->t, 2, (size_t)clock), 0.5, 0, 0);
    assert_int_equal(table_cell_type(f->t, 0, (size_t)when), CELL_DATE);
    /* 2026-03-15 18:00 = 46096 + 0.75 */
    assert_close(table_cell_number(f->t, 0, (size_t)when), 46096.75, 0, 0);
}

/* Custom codes one by one: xf i uses numFmt 164 + i. */
static void test_xlsx_time_only_custom_codes_are_numbers(void **state)
{
    fixture *f = *state;
    static const struct {
        const char *code;
        int date;
    } codes[] = {
        {"h:mm:ss", 0}, {"[h]:mm:ss", 0}, {"[mm]:ss", 0}, {"hh:mm", 0},
        {"mm:ss.0", 0}, {"[$-409]h:mm AM/PM", 0}, {"&quot;d&quot;h", 0},
        {"yyyy-mm-dd hh:mm", 1}, {"d-mmm", 1}, {"mmm", 1}, {"[h]\\d", 0},
        {"dd/mm/yyyy", 1}, {"0.00", 0},
    };
    enum { N = sizeof codes / sizeof codes[0] };
    char styles[4096], data[4096];
    size_t o = (size_t)snprintf(styles, sizeof styles, "<numFmts>");
    for (size_t i = 0; i < N; i++)
        o += (size_t)snprintf(styles + o, sizeof styles - o,
                              "<numFmt numFmtId=\"%zu\" formatCode=\"%s\"/>",
                              164 + i, codes[i].code);
    o += (size_t)snprintf(styles + o, sizeof styles - o, "</numFmts><cellXfs>");
    for (size_t i = 0; i < N; i++)
        o += (size_t)snprintf(styles + o, sizeof styles - o,
                              "<xf numFmtId=\"%zu\"/>", 164 + i);
    snprintf(styles + o, sizeof styles - o, "</cellXfs>");
    o = (size_t)snprintf(data, sizeof data, HEAD);
    for (size_t i = 0; i < N; i++)
        o += (size_t)snprintf(data + o, sizeof data - o,
                              "<row><c s=\"%zu\"><v>0.5</v></c></row>", i);
    write_styled_book(f, NULL, data, NULL, styles);
    assert_int_equal(read_s(f, NULL), RF_OK);
    assert_int_equal(table_rows(f->t), N);
    for (size_t i = 0; i < N; i++)
        if (table_cell_type(f->t, i, 0) !=
            (codes[i].date ? CELL_DATE : CELL_NUMBER))
            fail_msg("format '%s' gave type %d", codes[i].code,
                     table_cell_type(f->t, i, 0));
}

/* A styles part with thousands of formats and cell styles (the lookup is
 * sorted, not every style against every format): built-in ids, undefined
 * ids, and formats redefined later in the part (the last definition
 * wins) all resolve as before. */
#define MANY_FMTS 3000
#define MANY_REDEFINED 100
#define MANY_XFS 6000

static int many_expected_date(size_t xf)
{
    switch (xf) {
    case 0: return 0;   /* General */
    case 1: return 1;   /* 14, a built-in date */
    case 2: return 0;   /* 20, a built-in time of day */
    case 3: return 0;   /* 9999, defined nowhere */
    default: {
        size_t j = (xf - 4) % MANY_FMTS;
        return (j % 2 == 0) != (j < MANY_REDEFINED);
    }
    }
}

static void test_xlsx_many_styles_and_formats_resolve(void **state)
{
    fixture *f = *state;
    size_t cap = (size_t)(MANY_FMTS + MANY_REDEFINED + MANY_XFS) * 80;
    char *styles = malloc(cap);
    assert_non_null(styles);
    size_t o = (size_t)snprintf(styles, cap, "<numFmts>");
    for (size_t j = 0; j < MANY_FMTS + MANY_REDEFINED; j++) {
        size_t id = j % MANY_FMTS;  /* the first ids come twice */
        int date = (id % 2 == 0) != (j >= MANY_FMTS);
        o += (size_t)snprintf(styles + o, cap - o,
                              "<numFmt numFmtId=\"%zu\" formatCode=\"%s\"/>",
                              164 + id, date ? "yyyy-mm-dd" : "0.00");
    }
    o += (size_t)snprintf(styles + o, cap - o,
                          "</numFmts><cellXfs><xf numFmtId=\"0\"/>"
                          "<xf numFmtId=\"14\"/><xf numFmtId=\"20\"/>"
                          "<xf numFmtId=\"9999\"/>");
    for (size_t k = 4; k < MANY_XFS; k++)
        o += (size_t)snprintf(styles + o, cap - o, "<xf numFmtId=\"%zu\"/>",
                              164 + (k - 4) % MANY_FMTS);
    snprintf(styles + o, cap - o, "</cellXfs>");
    assert_true(o < cap - 16);

    static const size_t probe[] = {0, 1, 2, 3, 4, 5, 50, 103, 104, 105,
                                   3003, 3004, 3005, 3103, 3104, 5000,
                                   MANY_XFS - 1};
    enum { P = sizeof probe / sizeof probe[0] };
    char data[4096];
    o = (size_t)snprintf(data, sizeof data, HEAD);
    for (size_t i = 0; i < P; i++)
        o += (size_t)snprintf(data + o, sizeof data - o,
                              "<row><c s=\"%zu\"><v>45000</v></c>"
                              "<c><v>%zu</v></c></row>", probe[i], probe[i]);
    write_styled_book(f, NULL, data, NULL, styles);
    free(styles);
    assert_int_equal(read_s(f, NULL), RF_OK);
    assert_int_equal(table_rows(f->t), P);
    for (size_t i = 0; i < P; i++) {
        cell_type want = many_expected_date(probe[i]) ? CELL_DATE
                                                      : CELL_NUMBER;
        if (table_cell_type(f->t, i, 0) != want)
            fail_msg("style %zu gave type %d", probe[i],
                     table_cell_type(f->t, i, 0));
        assert_close(table_cell_number(f->t, i, 0), 45000, 0, 0);
    }
}

int main(void)
{
    const struct CMUnitTest tests[] = {
#define T(name) cmocka_unit_test_setup_teardown(name, setup, teardown)
        T(test_xlsx_openpyxl_types_match_csv_twin),
        T(test_xlsx_header_below_row1_non_ascii_match_twin),
        T(test_xlsx_1904_workbook_matches_csv_twin),
        T(test_xlsx_libreoffice_formulas_match_csv_twin),
        T(test_xlsx_inline_rich_and_unnumbered_match_twin),
        T(test_xlsx_dates_are_1900_serials),
        T(test_xlsx_1904_serials_are_converted),
        T(test_xlsx_error_cells_keep_their_text),
        T(test_xlsx_rows_keep_their_sheet_numbers),
        T(test_xlsx_wrong_sheet_name_lists_sheets),
        T(test_xlsx_sheets_lists_names_and_used_size),
        T(test_xlsx_cells_without_r_follow_the_previous),
        T(test_xlsx_sheets_without_dimension_streams),
        T(test_xlsx_zip_that_is_not_a_workbook),
        T(test_xlsx_chart_sheet_is_refused),
        T(test_xlsx_bad_number_names_the_cell),
        T(test_xlsx_shared_string_out_of_range),
        T(test_xlsx_unknown_cell_type),
        T(test_xlsx_bad_reference_row_bool_date_style),
        T(test_xlsx_cell_beyond_format_limits),
        T(test_xlsx_cell_text_over_limit),
        T(test_xlsx_missing_sheet_part),
        T(test_xlsx_workbook_without_sheets),
        T(test_xlsx_bad_files_are_refused),
        T(test_xlsx_formula_without_saved_result_is_error),
        T(test_xlsx_row_of_only_unsaved_formulas_is_kept),
        T(test_xlsx_unsaved_formulas_count_as_used),
        T(test_xlsx_time_only_formats_are_numbers),
        T(test_xlsx_time_only_custom_codes_are_numbers),
        T(test_xlsx_many_styles_and_formats_resolve),
#undef T
    };
    return cmocka_run_group_tests_name("xlsx", tests, NULL, NULL);
}
