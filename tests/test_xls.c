/*
 * test_xls.c: the .xls reader. Each fixture of tests/data/ (made by
 * tests/data/make_xls_fixtures.py: openpyxl -> LibreOffice headless ->
 * .xls, two of them then altered record by record) is read sheet by sheet
 * and compared cell by cell with its CSV twin read by the CSV reader. Then
 * the values FreeXL 1.0.6 alone gets wrong (formula results, BOOLERR cells,
 * exact date serials), sheet choice, the sheet list, and every error path.
 * Run from the top folder.
 */
#include "testutil.h"

#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "../io/csv.h"
#include "../io/xls.h"

#define DATA "tests/data/"
#define BAD "tests/bad/"

typedef struct fx {
    rf_warnings warn;
    rf_error err;
    table *t;
} fx;

static int setup(void **state)
{
    fx *f = calloc(1, sizeof *f);
    if (!f)
        return -1;
    *state = f;
    return 0;
}

static int teardown(void **state)
{
    fx *f = *state;
    table_free(f->t);
    error_warnings_clear(&f->warn);
    free(f);
    return 0;
}

static table *read_xls(fx *f, const char *file, const char *sheet,
                       uint32_t header)
{
    table_free(f->t);
    f->t = NULL;
    rf_status st = xls_read(file, file, sheet, header, &f->t, &f->warn,
                            &f->err);
    if (st != RF_OK)
        print_error("%s: %s\n", f->err.where, f->err.message);
    assert_int_equal(st, RF_OK);
    assert_non_null(f->t);
    return f->t;
}

static rf_status read_fail(fx *f, const char *file)
{
    table *t = NULL;
    rf_status st = xls_read(file, file, NULL, 0, &t, &f->warn, &f->err);
    assert_null(t);
    assert_int_equal(f->err.status, st);
    assert_true(f->err.message[0] != '\0');
    return st;
}

/* Compares every cell of sheet `sheet` of xls with its CSV twin. The CSV
 * reader has no error kind, so an error cell matches text that reads the
 * same; with dates_as_numbers a date matches the number of its serial. */
static void compare_twin(const char *xls, const char *sheet, uint32_t header,
                         const char *csvfile, int dates_as_numbers)
{
    rf_warnings w = {0};
    rf_error e;
    table *x = NULL, *c = NULL;
    csv_options opt = {',', 0};
    char buf[64];
    if (xls_read(xls, xls, sheet, header, &x, &w, &e) != RF_OK)
        print_error("%s: %s\n", e.where, e.message);
    assert_non_null(x);
    if (csv_read(csvfile, csvfile, &opt, &c, &w, &e) != RF_OK)
        print_error("%s: %s\n", e.where, e.message);
    assert_non_null(c);
    assert_int_equal(table_cols(x), table_cols(c));
    assert_int_equal(table_rows(x), table_rows(c));
    for (size_t j = 0; j < table_cols(c); j++)
        assert_string_equal(table_column_name(x, j), table_column_name(c, j));
    for (size_t i = 0; i < table_rows(c); i++) {
        for (size_t j = 0; j < table_cols(c); j++) {
            cell_type tx = table_cell_type(x, i, j);
            cell_type tc = table_cell_type(c, i, j);
            int same = tx == tc || (tx == CELL_ERROR && tc == CELL_TEXT)
                       || (dates_as_numbers && tx == CELL_DATE
                           && tc == CELL_NUMBER);
            if (!same) {
                print_error("%s: type %d, twin %d\n",
                            table_where(x, i, j, buf, sizeof buf), (int)tx,
                            (int)tc);
                fail();
            }
            if (tc == CELL_TEXT)
                assert_string_equal(table_cell_text(x, i, j),
                                    table_cell_text(c, i, j));
            else if (tc != CELL_BLANK)
                /* a datetime's seconds: 1e-9 days is 0.1 ms */
                assert_close(table_cell_number(x, i, j),
                             table_cell_number(c, i, j), 1e-13, 1e-9);
        }
    }
    table_free(x);
    table_free(c);
    error_warnings_clear(&w);
}

/* ---- twins ------------------------------------------------------------ */

static void test_xls_types_match_csv_twin(void **state)
{
    (void)state;
    compare_twin(DATA "xls-types.xls", NULL, 0, DATA "xls-types-Types.csv", 0);
}

static void test_xls_every_sheet_matches_csv_twin(void **state)
{
    (void)state;
    compare_twin(DATA "xls-sheets.xls", "Sales 2024", 0,
                 DATA "xls-sheets-Sales 2024.csv", 0);
    compare_twin(DATA "xls-sheets.xls", "Größe ÄÖÜ", 3,
                 DATA "xls-sheets-Größe ÄÖÜ.csv", 0);
    compare_twin(DATA "xls-sheets.xls", "Notes", 0,
                 DATA "xls-sheets-Notes.csv", 0);
}

static void test_xls_1904_dates_match_csv_twin(void **state)
{
    (void)state;
    compare_twin(DATA "xls-1904.xls", NULL, 0, DATA "xls-1904-Mac.csv", 0);
}

static void test_xls_date_serials_match_csv_twin(void **state)
{
    (void)state;
    compare_twin(DATA "xls-serials.xls", NULL, 0,
                 DATA "xls-serials-Serials.csv", 1);
}

static void test_xls_boolerr_matches_csv_twin(void **state)
{
    (void)state;
    compare_twin(DATA "xls-boolerr.xls", NULL, 0,
                 DATA "xls-boolerr-Flags.csv", 0);
}

static void test_xls_unreadable_matches_csv_twin(void **state)
{
    (void)state;
    compare_twin(DATA "xls-unreadable.xls", NULL, 0,
                 DATA "xls-unreadable-Lost.csv", 0);
}

/* ---- what FreeXL alone would get wrong -------------------------------- */

static void test_xls_formula_results_are_read(void **state)
{
    fx *f = *state;
    /* FreeXL 1.0.6 reads all of these as NULL (seen with the fixture). The
     * expected values are the formulas worked out by hand. */
    table *t = read_xls(f, DATA "xls-types.xls", "Types", 0);
    long dbl = table_find_column(t, "double price");
    long lab = table_find_column(t, "label");
    long dear = table_find_column(t, "is dear");
    long per = table_find_column(t, "per room");
    long next = table_find_column(t, "next day");
    assert_true(dbl >= 0 && lab >= 0 && dear >= 0 && per >= 0 && next >= 0);
    assert_int_equal(table_cell_type(t, 1, (size_t)dbl), CELL_NUMBER);
    assert_close(table_cell_number(t, 1, (size_t)dbl), 637000, 0, 0);
    assert_int_equal(table_cell_type(t, 0, (size_t)lab), CELL_TEXT);
    assert_string_equal(table_cell_text(t, 0, (size_t)lab), "lot 2");
    assert_int_equal(table_cell_type(t, 1, (size_t)dear), CELL_BOOL);
    assert_close(table_cell_number(t, 1, (size_t)dear), 1, 0, 0);
    assert_int_equal(table_cell_type(t, 1, (size_t)per), CELL_ERROR);
    assert_string_equal(table_cell_text(t, 1, (size_t)per), "#DIV/0!");
    /* =C2+1 with C2 = 2024-01-01 (serial 45292, libraries.md check value) */
    assert_int_equal(table_cell_type(t, 0, (size_t)next), CELL_DATE);
    assert_close(table_cell_number(t, 0, (size_t)next), 45293, 0, 0);
}

static void test_xls_libreoffice_booleans_and_errors_are_kept(void **state)
{
    fx *f = *state;
    /* LibreOffice writes TRUE and #N/A constants as FORMULA records. */
    table *t = read_xls(f, DATA "xls-types.xls", NULL, 0);
    long pool = table_find_column(t, "pool");
    long survey = table_find_column(t, "survey");
    assert_int_equal(table_column_kind(t, (size_t)pool), KIND_YESNO);
    assert_int_equal(table_cell_type(t, 0, (size_t)pool), CELL_BOOL);
    assert_close(table_cell_number(t, 0, (size_t)pool), 1, 0, 0);
    assert_close(table_cell_number(t, 1, (size_t)pool), 0, 0, 0);
    assert_int_equal(table_cell_type(t, 0, (size_t)survey), CELL_ERROR);
    assert_string_equal(table_cell_text(t, 0, (size_t)survey), "#N/A");
}

static void test_xls_boolerr_cells_are_not_numbers(void **state)
{
    fx *f = *state;
    /* FreeXL 1.0.6 gives INT 1 for TRUE, #N/A and #DIV/0! alike (seen). */
    table *t = read_xls(f, DATA "xls-boolerr.xls", NULL, 0);
    assert_int_equal(table_cell_type(t, 0, 1), CELL_BOOL);
    assert_int_equal(table_cell_type(t, 1, 1), CELL_BOOL);
    assert_close(table_cell_number(t, 1, 1), 0, 0, 0);
    assert_int_equal(table_cell_type(t, 0, 2), CELL_ERROR);
    assert_string_equal(table_cell_text(t, 0, 2), "#N/A");
    assert_string_equal(table_cell_text(t, 2, 2), "#DIV/0!");
}

static void test_xls_unreadable_formula_says_what_to_do(void **state)
{
    fx *f = *state;
    table *t = read_xls(f, DATA "xls-unreadable.xls", NULL, 0);
    assert_int_equal(table_cell_type(t, 0, 0), CELL_ERROR);
    assert_non_null(strstr(table_cell_text(t, 0, 0), "save the file as .xlsx"));
    assert_int_equal(table_cell_type(t, 1, 0), CELL_ERROR);
}

static void test_xls_phantom_leap_day_and_last_serial(void **state)
{
    fx *f = *state;
    /* Serial 60 is 1900-02-29 of the 1900 system (Microsoft KB 214326);
     * 2958465 is 9999-12-31, the last date (ECMA-376 Part 1, 18.17.4.1).
     * FreeXL's own text says 9999-11-01 for it, and "24:00:00" for
     * 45292.9999999. */
    table *t = read_xls(f, DATA "xls-serials.xls", NULL, 0);
    int y, m, d;
    assert_int_equal(table_cell_type(t, 2, 1), CELL_DATE);
    assert_close(table_cell_number(t, 2, 1), 60, 0, 0);
    assert_int_equal(table_serial_date(60, &y, &m, &d), 0);
    assert_int_equal(m * 100 + d, 229);
    assert_close(table_cell_number(t, 5, 2), 45292.9999999, 1e-15, 0);
    assert_close(table_cell_number(t, 6, 1), 2958465, 0, 0);
}

static void test_xls_1904_serials_are_shifted(void **state)
{
    fx *f = *state;
    /* 1904 system: offset 1462 days (libraries.md, ECMA-376 date1904);
     * 1904-01-02 is day 1 there, so 1463 in the 1900 system. */
    table *t = read_xls(f, DATA "xls-1904.xls", NULL, 0);
    assert_close(table_cell_number(t, 0, 0), 45292, 0, 0);
    assert_close(table_cell_number(t, 1, 0), 1463, 0, 0);
    /* the formula =A3+7 gives a raw 1904 serial the reader shifts */
    assert_int_equal(table_cell_type(t, 1, 2), CELL_DATE);
    assert_close(table_cell_number(t, 1, 2), 1470, 0, 0);
}

static void test_xls_time_alone_is_fraction_of_day(void **state)
{
    fx *f = *state;
    table *t = read_xls(f, DATA "xls-types.xls", NULL, 0);
    long v = table_find_column(t, "viewing");
    assert_int_equal(table_column_kind(t, (size_t)v), KIND_NUMBER);
    assert_close(table_cell_number(t, 0, (size_t)v), 0.25, 0, 0);
    assert_close(table_cell_number(t, 3, (size_t)v), 0.5, 0, 0);
}

/* ---- sheets, header --------------------------------------------------- */

static void test_xls_header_below_title_keeps_places(void **state)
{
    fx *f = *state;
    char buf[128];
    table *t = read_xls(f, DATA "xls-sheets.xls", "2", 3);
    assert_string_equal(table_sheet(t), "Größe ÄÖÜ");
    assert_string_equal(table_column_name(t, 0), "Fläche m²");
    assert_int_equal(table_rows(t), 3);  /* the blank row 6 is skipped */
    assert_int_equal(table_row_source(t, 2), 7);
    table_where(t, 2, 2, buf, sizeof buf);
    assert_string_equal(buf, DATA "xls-sheets.xls[Größe ÄÖÜ]!D7");
    assert_string_equal(table_cell_text(t, 2, 2), "Ölberg 11");
}

static void test_xls_first_sheet_by_default(void **state)
{
    fx *f = *state;
    table *t = read_xls(f, DATA "xls-sheets.xls", NULL, 0);
    assert_string_equal(table_sheet(t), "Sales 2024");
    t = read_xls(f, DATA "xls-sheets.xls", "notes", 0);  /* any case */
    assert_string_equal(table_sheet(t), "Notes");
}

static void test_xls_missing_sheet_lists_the_sheets(void **state)
{
    fx *f = *state;
    table *t = NULL;
    assert_int_equal(xls_read(DATA "xls-sheets.xls", "s.xls", "Sales 2023", 0,
                              &t, &f->warn, &f->err), RF_EINPUT);
    assert_null(t);
    assert_non_null(strstr(f->err.message, "Sales 2024"));
    assert_non_null(strstr(f->err.message, "Größe ÄÖÜ"));
    assert_int_equal(xls_read(DATA "xls-sheets.xls", "s.xls", "4", 0, &t,
                              &f->warn, &f->err), RF_EINPUT);
}

static void test_xls_header_past_end_is_an_error(void **state)
{
    fx *f = *state;
    table *t = NULL;
    assert_int_equal(xls_read(DATA "xls-sheets.xls", "s.xls", "Notes", 9, &t,
                              &f->warn, &f->err), RF_EINPUT);
    assert_null(t);
    assert_non_null(strstr(f->err.where, "s.xls"));
}

static void test_xls_sheets_lists_names_and_sizes(void **state)
{
    fx *f = *state;
    grid_sheet *s = NULL;
    size_t n = 0;
    assert_int_equal(xls_sheets(DATA "xls-sheets.xls", "s.xls", &s, &n,
                                &f->err), RF_OK);
    assert_int_equal(n, 3);
    assert_string_equal(s[0].name, "Sales 2024");
    assert_int_equal(s[0].rows, 4);
    assert_int_equal(s[0].cols, 3);
    assert_string_equal(s[1].name, "Größe ÄÖÜ");
    assert_int_equal(s[1].rows, 7);  /* counted from A1: data end in E7 */
    assert_int_equal(s[1].cols, 5);
    assert_string_equal(s[2].name, "Notes");
    grid_sheets_free(s, n);
}

/* ---- errors ----------------------------------------------------------- */

static void test_xls_password_protected_is_refused(void **state)
{
    fx *f = *state;
    grid_sheet *s = NULL;
    size_t n = 9;
    assert_int_equal(read_fail(f, BAD "xls-password.xls"), RF_EINPUT);
    assert_non_null(strstr(f->err.message, "password-protected"));
    assert_non_null(strstr(f->err.message, ".xlsx"));
    assert_string_equal(f->err.where, BAD "xls-password.xls");
    assert_int_equal(xls_sheets(BAD "xls-password.xls", "p.xls", &s, &n,
                                &f->err), RF_EINPUT);
    assert_null(s);
    assert_int_equal(n, 0);
}

static void test_xls_truncated_is_damaged(void **state)
{
    fx *f = *state;
    assert_int_equal(read_fail(f, BAD "xls-truncated.xls"), RF_EINPUT);
    assert_non_null(strstr(f->err.message, "damaged"));
}

static void test_xls_compound_file_without_workbook(void **state)
{
    fx *f = *state;
    assert_int_equal(read_fail(f, BAD "xls-not-workbook.xls"), RF_EINPUT);
    assert_non_null(strstr(f->err.message, "not an .xls workbook"));
}

static void test_xls_encrypted_xlsx_is_recognised(void **state)
{
    fx *f = *state;
    assert_int_equal(xls_is_encrypted_ooxml(BAD "xls-encrypted-ooxml.xlsx"), 1);
    assert_int_equal(xls_is_encrypted_ooxml(DATA "xls-types.xls"), 0);
    assert_int_equal(xls_is_encrypted_ooxml(BAD "xls-not-workbook.xls"), 0);
    assert_int_equal(xls_is_encrypted_ooxml(DATA "xls-types-Types.csv"), 0);
    assert_int_equal(xls_is_encrypted_ooxml(DATA "no-such-file.xlsx"), 0);
    assert_int_equal(read_fail(f, BAD "xls-encrypted-ooxml.xlsx"), RF_EINPUT);
    assert_non_null(strstr(f->err.message, "password"));
}

static void test_xls_text_file_is_not_a_workbook(void **state)
{
    fx *f = *state;
    assert_int_equal(read_fail(f, DATA "xls-types-Types.csv"), RF_EINPUT);
    assert_non_null(strstr(f->err.message, "not an .xls workbook"));
}

static void test_xls_missing_file_is_a_system_error(void **state)
{
    fx *f = *state;
    grid_sheet *s = NULL;
    size_t n = 0;
    assert_int_equal(read_fail(f, DATA "no-such-file.xls"), RF_ESYSTEM);
    assert_int_equal(xls_sheets(DATA "no-such-file.xls", "n.xls", &s, &n,
                                &f->err), RF_ESYSTEM);
    assert_null(s);
}

/* A copy of a good fixture with bytes changed, in a temporary file. */
static void write_patched(const char *from, char *path, size_t at,
                          const unsigned char *bytes, size_t n)
{
    static unsigned char buf[16384];
    FILE *in = fopen(from, "rb");
    assert_non_null(in);
    size_t len = fread(buf, 1, sizeof buf, in);
    fclose(in);
    assert_true(at + n <= len);
    memcpy(buf + at, bytes, n);
    int fd = mkstemp(path);
    assert_true(fd >= 0);
    assert_int_equal(write(fd, buf, len), (ssize_t)len);
    close(fd);
}

static void test_xls_overlong_directory_name_is_refused(void **state)
{
    fx *f = *state;
    /* FreeXL 1.0.6 over-reads a stack buffer on such a name (fuzzing). The
     * directory's first sector is at header offset 0x30 ([MS-CFB] 2.2);
     * the root entry's name length is at 0x40 of its entry. */
    unsigned char h[0x34];
    FILE *in = fopen(DATA "xls-types.xls", "rb");
    assert_non_null(in);
    assert_int_equal(fread(h, 1, sizeof h, in), sizeof h);
    fclose(in);
    size_t dir = ((size_t)(h[0x30] | h[0x31] << 8) + 1) * 512;
    static const unsigned char big[2] = {0x00, 0x10};
    char path[] = "/tmp/rowfit-xls-XXXXXX";
    write_patched(DATA "xls-types.xls", path, dir + 0x40, big, 2);
    assert_int_equal(read_fail(f, path), RF_EINPUT);
    assert_non_null(strstr(f->err.message, "damaged"));
    unlink(path);
}

static void test_xls_cell_outside_sheet_size_is_refused(void **state)
{
    fx *f = *state;
    /* Found by tests/fuzz/fuzz_xls.c: FreeXL 1.0.6 corrupts its heap on a
     * cell record outside the sheet's DIMENSIONS. */
    assert_int_equal(read_fail(f, "tests/fuzz/crashes-xls/"
                                  "freexl-cell-outside-dimensions.xls"),
                     RF_EINPUT);
    assert_non_null(strstr(f->err.message, "outside the size"));
    /* the same effect through a second DIMENSIONS record */
    assert_int_equal(read_fail(f, "tests/fuzz/crashes-xls/"
                                  "freexl-second-dimensions.xls"),
                     RF_EINPUT);
    assert_non_null(strstr(f->err.message, "damaged"));
}

static void test_xls_record_past_stream_end_is_refused(void **state)
{
    fx *f = *state;
    /* Found by tests/fuzz/fuzz_xls.c: FreeXL 1.0.6 copies such a record
     * from past the end of its buffer. */
    assert_int_equal(read_fail(f, "tests/fuzz/crashes-xls/"
                                  "freexl-record-past-end.xls"),
                     RF_EINPUT);
    assert_non_null(strstr(f->err.message, "runs past its end"));
    /* a number format's text longer than its record */
    assert_int_equal(read_fail(f, "tests/fuzz/crashes-xls/"
                                  "freexl-format-string-too-long.xls"),
                     RF_EINPUT);
    assert_non_null(strstr(f->err.message, "runs past its end"));
}

static void test_xls_shared_string_past_record_is_refused(void **state)
{
    fx *f = *state;
    /* Found by tests/fuzz/fuzz_xls.c: FreeXL 1.0.6 reads a shared string
     * by its declared character count, past the heap buffer, when the
     * string is longer than its SST record. */
    assert_int_equal(read_fail(f, "tests/fuzz/crashes-xls/"
                                  "freexl-open-overread.xls"),
                     RF_EINPUT);
    assert_string_equal(f->err.message,
                        "damaged .xls: a shared string runs past its "
                        "record; save the file again or as .xlsx");
}

/* Every prefix of a good file is refused cleanly or read; none crashes. */
static void test_xls_every_truncation_fails_cleanly(void **state)
{
    fx *f = *state;
    FILE *in = fopen(DATA "xls-types.xls", "rb");
    assert_non_null(in);
    static unsigned char buf[16384];
    size_t n = fread(buf, 1, sizeof buf, in);
    fclose(in);
    char path[] = "/tmp/rowfit-xls-XXXXXX";
    int fd = mkstemp(path);
    assert_true(fd >= 0);
    for (size_t cut = 0; cut < n; cut += 97) {
        assert_int_equal(ftruncate(fd, 0), 0);
        assert_int_equal(pwrite(fd, buf, cut, 0), (ssize_t)cut);
        table *t = NULL;
        rf_status st = xls_read(path, "cut.xls", NULL, 0, &t, &f->warn,
                                &f->err);
        if (st == RF_OK)
            table_free(t);
        else
            assert_true(f->err.message[0] != '\0');
    }
    close(fd);
    unlink(path);
}

#define T(name) cmocka_unit_test_setup_teardown(name, setup, teardown)

int main(void)
{
    const struct CMUnitTest tests[] = {
        T(test_xls_types_match_csv_twin),
        T(test_xls_every_sheet_matches_csv_twin),
        T(test_xls_1904_dates_match_csv_twin),
        T(test_xls_date_serials_match_csv_twin),
        T(test_xls_boolerr_matches_csv_twin),
        T(test_xls_unreadable_matches_csv_twin),
        T(test_xls_formula_results_are_read),
        T(test_xls_libreoffice_booleans_and_errors_are_kept),
        T(test_xls_boolerr_cells_are_not_numbers),
        T(test_xls_unreadable_formula_says_what_to_do),
        T(test_xls_phantom_leap_day_and_last_serial),
        T(test_xls_1904_serials_are_shifted),
        T(test_xls_time_alone_is_fraction_of_day),
        T(test_xls_header_below_title_keeps_places),
        T(test_xls_first_sheet_by_default),
        T(test_xls_missing_sheet_lists_the_sheets),
        T(test_xls_header_past_end_is_an_error),
        T(test_xls_sheets_lists_names_and_sizes),
        T(test_xls_password_protected_is_refused),
        T(test_xls_truncated_is_damaged),
        T(test_xls_compound_file_without_workbook),
        T(test_xls_encrypted_xlsx_is_recognised),
        T(test_xls_text_file_is_not_a_workbook),
        T(test_xls_missing_file_is_a_system_error),
        T(test_xls_overlong_directory_name_is_refused),
        T(test_xls_cell_outside_sheet_size_is_refused),
        T(test_xls_record_past_stream_end_is_refused),
        T(test_xls_shared_string_past_record_is_refused),
        T(test_xls_every_truncation_fails_cleanly),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
