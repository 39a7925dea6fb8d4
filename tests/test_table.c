/*
 * test_table.c: the table type: columns, cells, kinds, places, trimming,
 * column letters and 1900-system date serials.
 */
#include "testutil.h"

#include <stdlib.h>
#include <string.h>

#include "../io/table.h"

static table *csv_table(const char *cols[], size_t n)
{
    table *t = table_create("sales.csv", NULL);
    assert_non_null(t);
    rf_error err;
    for (size_t i = 0; i < n; i++)
        assert_int_equal(table_add_column(t, cols[i], (uint32_t)i, 1, &err),
                         RF_OK);
    return t;
}

static void test_table_stores_cells_of_every_type(void **state)
{
    (void)state;
    const char *cols[] = {"price", "sold", "pool", "street", "check"};
    table *t = csv_table(cols, 5);
    rf_error err;
    assert_int_equal(table_append_row(t, 2, &err), RF_OK);
    assert_int_equal(table_set_number(t, 0, 182450.75, &err), RF_OK);
    assert_int_equal(table_set_date(t, 1, 45292.5, &err), RF_OK);
    assert_int_equal(table_set_bool(t, 2, 7, &err), RF_OK);
    assert_int_equal(table_set_text(t, 3, "Elm Road 12xx", 11, &err), RF_OK);
    assert_int_equal(table_set_error(t, 4, "#N/A", 4, &err), RF_OK);

    assert_int_equal(table_rows(t), 1);
    assert_int_equal(table_cols(t), 5);
    assert_int_equal(table_cell_type(t, 0, 0), CELL_NUMBER);
    assert_close(table_cell_number(t, 0, 0), 182450.75, 0, 0);
    assert_int_equal(table_cell_type(t, 0, 1), CELL_DATE);
    assert_close(table_cell_number(t, 0, 1), 45292.5, 0, 0);
    assert_int_equal(table_cell_type(t, 0, 2), CELL_BOOL);
    assert_close(table_cell_number(t, 0, 2), 1.0, 0, 0);
    assert_int_equal(table_cell_type(t, 0, 3), CELL_TEXT);
    assert_string_equal(table_cell_text(t, 0, 3), "Elm Road 12");
    assert_true(isnan(table_cell_number(t, 0, 3)));
    assert_null(table_cell_text(t, 0, 0));
    assert_int_equal(table_cell_type(t, 0, 4), CELL_ERROR);
    assert_string_equal(table_cell_text(t, 0, 4), "#N/A");
    assert_string_equal(table_file(t), "sales.csv");
    assert_null(table_sheet(t));
    assert_int_equal(table_row_source(t, 0), 2);
    table_free(t);
}

static void test_table_new_row_is_blank(void **state)
{
    (void)state;
    const char *cols[] = {"a", "b"};
    table *t = csv_table(cols, 2);
    rf_error err;
    for (uint32_t r = 0; r < 3; r++) {
        assert_int_equal(table_append_row(t, r + 2, &err), RF_OK);
        if (r != 1)
            assert_int_equal(table_set_number(t, 0, 2.385 * r, &err), RF_OK);
    }
    assert_int_equal(table_cell_type(t, 1, 0), CELL_BLANK);
    assert_int_equal(table_cell_type(t, 2, 1), CELL_BLANK);
    assert_int_equal(table_column_blanks(t, 0), 1);
    assert_int_equal(table_column_blanks(t, 1), 3);
    table_free(t);
}

static column_kind kind_of(const char *const *cells, size_t n)
{
    const char *cols[] = {"x"};
    table *t = csv_table(cols, 1);
    rf_error err;
    for (size_t i = 0; i < n; i++) {
        assert_int_equal(table_append_row(t, (uint32_t)i + 2, &err), RF_OK);
        const char *c = cells[i];
        /* "n:" number, "d:" date, "b:" bool, "t:" text, "e:" error,
         * "" blank */
        if (c[0] == 'n')
            table_set_number(t, 0, atof(c + 2), &err);
        else if (c[0] == 'd')
            table_set_date(t, 0, atof(c + 2), &err);
        else if (c[0] == 'b')
            table_set_bool(t, 0, atoi(c + 2), &err);
        else if (c[0] == 't')
            table_set_text(t, 0, c + 2, strlen(c + 2), &err);
        else if (c[0] == 'e')
            table_set_error(t, 0, c + 2, strlen(c + 2), &err);
    }
    column_kind k = table_column_kind(t, 0);
    table_free(t);
    return k;
}

static void test_table_column_kind_follows_cells(void **state)
{
    (void)state;
    const char *blank[] = {"", ""};
    const char *num[] = {"n:1.5", "", "n:-2"};
    const char *date[] = {"d:45292", "d:45293.25"};
    const char *yesno[] = {"b:1", "t:Yes", "t: no ", "t:FALSE", "t:true", ""};
    const char *text[] = {"t:Riverside", "", "t:Hillcrest"};
    const char *mixed[] = {"n:1", "t:n/a"};
    const char *err[] = {"n:1", "e:#DIV/0!"};
    const char *notyes[] = {"t:yes", "t:maybe"};
    assert_int_equal(kind_of(blank, 2), KIND_BLANK);
    assert_int_equal(kind_of(num, 3), KIND_NUMBER);
    assert_int_equal(kind_of(date, 2), KIND_DATE);
    assert_int_equal(kind_of(yesno, 6), KIND_YESNO);
    assert_int_equal(kind_of(text, 3), KIND_TEXT);
    assert_int_equal(kind_of(mixed, 2), KIND_MIXED);
    assert_int_equal(kind_of(err, 2), KIND_MIXED);
    assert_int_equal(kind_of(notyes, 2), KIND_TEXT);
    assert_string_equal(table_kind_name(KIND_YESNO), "yes-no");
    assert_string_equal(table_kind_name(KIND_NUMBER), "number");
    assert_string_equal(table_kind_name(KIND_MIXED), "mixed");
    assert_string_equal(table_kind_name(KIND_BLANK), "blank");
    assert_string_equal(table_kind_name(KIND_DATE), "date");
    assert_string_equal(table_kind_name(KIND_TEXT), "text");
}

static void test_table_overwritten_cell_updates_kind(void **state)
{
    (void)state;
    const char *cols[] = {"x"};
    table *t = csv_table(cols, 1);
    rf_error err;
    table_append_row(t, 2, &err);
    table_set_text(t, 0, "yes", 3, &err);
    assert_int_equal(table_column_kind(t, 0), KIND_YESNO);
    table_set_number(t, 0, 3.25, &err);
    assert_int_equal(table_column_kind(t, 0), KIND_NUMBER);
    table_set_text(t, 0, "n/a", 3, &err);
    assert_int_equal(table_column_kind(t, 0), KIND_TEXT);
    assert_int_equal(table_column_blanks(t, 0), 0);
    table_free(t);
}

static void test_table_rejects_duplicate_csv_header(void **state)
{
    (void)state;
    table *t = table_create("sales.csv", NULL);
    rf_error err;
    assert_int_equal(table_add_column(t, "id", 0, 1, &err), RF_OK);
    assert_int_equal(table_add_column(t, "price", 2, 1, &err), RF_OK);
    assert_int_equal(table_add_column(t, "Price", 3, 1, &err), RF_OK);
    assert_int_equal(table_add_column(t, " price ", 4, 1, &err), RF_EINPUT);
    assert_int_equal(err.status, RF_EINPUT);
    assert_string_equal(err.where, "sales.csv:1");
    assert_non_null(strstr(err.message, "'price'"));
    assert_non_null(strstr(err.message, "column E"));
    assert_non_null(strstr(err.message, "column C"));
    assert_int_equal(table_cols(t), 3);
    table_free(t);
}

static void test_table_rejects_duplicate_sheet_header(void **state)
{
    (void)state;
    table *t = table_create("sales.xlsx", "Closed sales");
    rf_error err;
    assert_int_equal(table_add_column(t, "area", 1, 3, &err), RF_OK);
    assert_int_equal(table_add_column(t, "area", 27, 3, &err), RF_EINPUT);
    assert_string_equal(err.where, "sales.xlsx[Closed sales]!AB3");
    assert_non_null(strstr(err.message, "B3"));
    table_free(t);
}

static void test_table_finds_columns_after_trimming(void **state)
{
    (void)state;
    const char *cols[] = {"  lot size\t", "bedrooms"};
    table *t = csv_table(cols, 2);
    assert_string_equal(table_column_name(t, 0), "lot size");
    assert_int_equal(table_find_column(t, "lot size"), 0);
    assert_int_equal(table_find_column(t, " bedrooms "), 1);
    assert_int_equal(table_find_column(t, "Bedrooms"), -1);
    assert_int_equal(table_find_column(t, "lot  size"), -1);
    table_free(t);
}

static void test_table_where_names_line_cell_and_row(void **state)
{
    (void)state;
    char buf[128];
    rf_error err;
    table *c = table_create("sales.csv", NULL);
    table_add_column(c, "a", 0, 1, &err);
    table_add_column(c, "b", 1, 1, &err);
    table_append_row(c, 1042, &err);
    assert_string_equal(table_where(c, 0, 1, buf, sizeof buf),
                        "sales.csv:1042");
    assert_string_equal(table_where(c, 0, (size_t)-1, buf, sizeof buf),
                        "sales.csv:1042");
    table_free(c);

    table *s = table_create("sales.xlsx", "Closed sales");
    table_add_column(s, "a", 0, 1, &err);
    table_add_column(s, "price", 3, 1, &err);
    table_append_row(s, 17, &err);
    assert_string_equal(table_where(s, 0, 1, buf, sizeof buf),
                        "sales.xlsx[Closed sales]!D17");
    assert_string_equal(table_where(s, 0, (size_t)-1, buf, sizeof buf),
                        "sales.xlsx[Closed sales] row 17");
    assert_string_equal(table_sheet(s), "Closed sales");
    /* A short buffer truncates instead of overflowing. */
    char small[8];
    assert_string_equal(table_where(s, 0, 1, small, sizeof small), "sales.x");
    table_free(s);
}

static void test_table_cell_show_reads_like_a_user(void **state)
{
    (void)state;
    const char *cols[] = {"a", "b", "c", "d", "e", "f", "g", "h"};
    table *t = csv_table(cols, 8);
    rf_error err;
    char buf[64];
    table_append_row(t, 2, &err);
    table_set_text(t, 0, "n/a", 3, &err);
    table_set_number(t, 1, 12.5, &err);
    /* 2026-03-15 = serial 46096: 2024-01-01 is 45292 (libraries.md) plus
     * 366 days of 2024, 365 of 2025 and 73 to 15 March 2026. */
    table_set_date(t, 2, 45292 + 366 + 365 + 73, &err);
    table_set_date(t, 3, 45292 + 0.5 + 30.0 / 1440, &err);
    table_set_bool(t, 4, 1, &err);
    table_set_error(t, 5, "#N/A", 4, &err);
    table_set_date(t, 7, 45292 + (14 * 3600 + 30 * 60 + 5) / 86400.0, &err);
    assert_string_equal(table_cell_show(t, 0, 0, buf, sizeof buf), "'n/a'");
    assert_string_equal(table_cell_show(t, 0, 1, buf, sizeof buf), "12.5");
    assert_string_equal(table_cell_show(t, 0, 2, buf, sizeof buf),
                        "2026-03-15");
    assert_string_equal(table_cell_show(t, 0, 3, buf, sizeof buf),
                        "2024-01-01 12:30");
    assert_string_equal(table_cell_show(t, 0, 4, buf, sizeof buf), "TRUE");
    assert_string_equal(table_cell_show(t, 0, 5, buf, sizeof buf), "#N/A");
    assert_string_equal(table_cell_show(t, 0, 6, buf, sizeof buf), "blank");
    assert_string_equal(table_cell_show(t, 0, 7, buf, sizeof buf),
                        "2024-01-01 14:30:05");
    table_set_bool(t, 4, 0, &err);
    assert_string_equal(table_cell_show(t, 0, 4, buf, sizeof buf), "FALSE");
    table_free(t);
}

static void test_table_trim_drops_only_trailing_blank_rows(void **state)
{
    (void)state;
    const char *cols[] = {"a", "b"};
    table *t = csv_table(cols, 2);
    rf_error err;
    table_append_row(t, 2, &err);
    table_set_number(t, 1, 1, &err);
    table_append_row(t, 3, &err);  /* blank, in the middle */
    table_append_row(t, 4, &err);
    table_set_text(t, 0, "x", 1, &err);
    table_append_row(t, 5, &err);
    table_append_row(t, 6, &err);
    table_trim(t);
    assert_int_equal(table_rows(t), 3);
    assert_int_equal(table_row_source(t, 2), 4);
    assert_int_equal(table_column_blanks(t, 0), 2);
    table_free(t);

    table *e = csv_table(cols, 2);
    table_append_row(e, 2, &err);
    table_trim(e);
    assert_int_equal(table_rows(e), 0);
    table_free(e);
}

static void test_table_text_stays_put_while_table_grows(void **state)
{
    (void)state;
    const char *cols[] = {"note"};
    table *t = csv_table(cols, 1);
    rf_error err;
    table_append_row(t, 2, &err);
    table_set_text(t, 0, "first", 5, &err);
    const char *first = table_cell_text(t, 0, 0);
    /* A text longer than an arena block gets a block of its own. */
    size_t big = 200000;
    char *long_text = malloc(big);
    assert_non_null(long_text);
    memset(long_text, 'q', big);
    char line[32];
    for (uint32_t r = 1; r < 50000; r++) {
        assert_int_equal(table_append_row(t, r + 2, &err), RF_OK);
        if (r == 777) {
            assert_int_equal(table_set_text(t, 0, long_text, big, &err),
                             RF_OK);
        } else {
            int n = snprintf(line, sizeof line, "note %u", (unsigned)r);
            assert_int_equal(table_set_text(t, 0, line, (size_t)n, &err),
                             RF_OK);
        }
    }
    assert_ptr_equal(table_cell_text(t, 0, 0), first);
    assert_string_equal(first, "first");
    assert_string_equal(table_cell_text(t, 49999, 0), "note 49999");
    assert_int_equal(strlen(table_cell_text(t, 777, 0)), big);
    assert_string_equal(table_cell_text(t, 778, 0), "note 778");
    free(long_text);
    table_free(t);
}

static void test_table_holds_a_million_rows_of_ten_columns(void **state)
{
    (void)state;
    const char *cols[] = {"c0", "c1", "c2", "c3", "c4",
                          "c5", "c6", "c7", "c8", "c9"};
    table *t = csv_table(cols, 10);
    rf_error err;
    const size_t n = 1000000;
    for (size_t r = 0; r < n; r++) {
        assert_int_equal(table_append_row(t, (uint32_t)r + 2, &err), RF_OK);
        for (size_t c = 0; c < 10; c++)
            table_set_number(t, c, (double)r * 0.5 + (double)c, &err);
    }
    assert_int_equal(table_rows(t), n);
    assert_close(table_cell_number(t, 999999, 9), 999999 * 0.5 + 9, 0, 0);
    assert_int_equal(table_row_source(t, 999999), 1000001);
    assert_int_equal(table_column_kind(t, 3), KIND_NUMBER);
    table_free(t);
}

static void test_table_column_letters(void **state)
{
    (void)state;
    char buf[16];
    /* Column naming A..Z, AA.. and the last column XFD of a 16,384-column
     * sheet (ECMA-376 Part 1, 18.3.1.4 "c (Cell)" references; limit from
     * libraries.md A1). */
    assert_string_equal(table_column_letters(0, buf, sizeof buf), "A");
    assert_string_equal(table_column_letters(25, buf, sizeof buf), "Z");
    assert_string_equal(table_column_letters(26, buf, sizeof buf), "AA");
    assert_string_equal(table_column_letters(27, buf, sizeof buf), "AB");
    assert_string_equal(table_column_letters(701, buf, sizeof buf), "ZZ");
    assert_string_equal(table_column_letters(702, buf, sizeof buf), "AAA");
    assert_string_equal(table_column_letters(16383, buf, sizeof buf), "XFD");
    assert_string_equal(table_column_letters(UINT32_MAX, buf, sizeof buf),
                        "MWLQKWV");
    char two[2];
    assert_string_equal(table_column_letters(27, two, sizeof two), "A");
}

static void test_table_date_serial_check_values(void **state)
{
    (void)state;
    /* libraries.md "Spreadsheet file facts": verified with libxlsxwriter's
     * converter; the phantom 1900-02-29 = 60 from Microsoft KB 214326. */
    assert_close(table_date_serial(1900, 1, 1), 1, 0, 0);
    assert_close(table_date_serial(1900, 2, 28), 59, 0, 0);
    assert_close(table_date_serial(1900, 2, 29), 60, 0, 0);
    assert_close(table_date_serial(1900, 3, 1), 61, 0, 0);
    assert_close(table_date_serial(2024, 1, 1), 45292, 0, 0);
    /* The last day a spreadsheet shows (table.h: 1..2958465). */
    assert_close(table_date_serial(9999, 12, 31), 2958465, 0, 0);
    int y, m, d;
    assert_int_equal(table_serial_date(60, &y, &m, &d), 0);
    assert_true(y == 1900 && m == 2 && d == 29);
    assert_int_equal(table_serial_date(59.75, &y, &m, &d), 0);
    assert_true(y == 1900 && m == 2 && d == 28);
    assert_int_equal(table_serial_date(45292, &y, &m, &d), 0);
    assert_true(y == 2024 && m == 1 && d == 1);
    assert_int_equal(table_serial_date(2958465.9, &y, &m, &d), 0);
    assert_true(y == 9999 && m == 12 && d == 31);
}

static void test_table_date_serial_rejects_invalid_dates(void **state)
{
    (void)state;
    assert_true(table_date_serial(1899, 12, 31) < 0);
    assert_true(table_date_serial(10000, 1, 1) < 0);
    assert_true(table_date_serial(2023, 2, 29) < 0);
    assert_true(table_date_serial(2100, 2, 29) < 0);
    assert_true(table_date_serial(2024, 2, 30) < 0);
    assert_true(table_date_serial(2024, 4, 31) < 0);
    assert_true(table_date_serial(2024, 13, 1) < 0);
    assert_true(table_date_serial(2024, 0, 1) < 0);
    assert_true(table_date_serial(2024, 1, 0) < 0);
    assert_close(table_date_serial(2000, 2, 29),
                 table_date_serial(2000, 2, 28) + 1, 0, 0);
    int y, m, d;
    assert_int_equal(table_serial_date(0.5, &y, &m, &d), -1);
    assert_int_equal(table_serial_date(-3, &y, &m, &d), -1);
    assert_int_equal(table_serial_date(2958466, &y, &m, &d), -1);
    assert_int_equal(table_serial_date(NAN, &y, &m, &d), -1);
}

static void test_table_date_serial_round_trips_every_day(void **state)
{
    (void)state;
    /* Every serial maps to a date that maps back, and consecutive serials
     * are consecutive calendar days (checked by stepping the date). */
    int py = 1900, pm = 1, pd = 0;
    static const int mdays[12] = {31, 29, 31, 30, 31, 30,
                                  31, 31, 30, 31, 30, 31};
    for (long s = 1; s <= 2958465; s++) {
        int y, m, d;
        assert_int_equal(table_serial_date((double)s, &y, &m, &d), 0);
        int leap = (py % 4 == 0 && py % 100 != 0) || py % 400 == 0 ||
                   py == 1900;
        int last = pm == 2 ? (leap ? 29 : 28) : mdays[pm - 1];
        if (pd < last) {
            pd++;
        } else if (pm < 12) {
            pm++;
            pd = 1;
        } else {
            py++;
            pm = 1;
            pd = 1;
        }
        if (y != py || m != pm || d != pd)
            fail_msg("serial %ld gave %d-%d-%d, expected %d-%d-%d", s, y, m,
                     d, py, pm, pd);
        if (table_date_serial(y, m, d) != (double)s)
            fail_msg("%d-%d-%d did not map back to %ld", y, m, d, s);
    }
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_table_stores_cells_of_every_type),
        cmocka_unit_test(test_table_new_row_is_blank),
        cmocka_unit_test(test_table_column_kind_follows_cells),
        cmocka_unit_test(test_table_overwritten_cell_updates_kind),
        cmocka_unit_test(test_table_rejects_duplicate_csv_header),
        cmocka_unit_test(test_table_rejects_duplicate_sheet_header),
        cmocka_unit_test(test_table_finds_columns_after_trimming),
        cmocka_unit_test(test_table_where_names_line_cell_and_row),
        cmocka_unit_test(test_table_cell_show_reads_like_a_user),
        cmocka_unit_test(test_table_trim_drops_only_trailing_blank_rows),
        cmocka_unit_test(test_table_text_stays_put_while_table_grows),
        cmocka_unit_test(test_table_holds_a_million_rows_of_ten_columns),
        cmocka_unit_test(test_table_column_letters),
        cmocka_unit_test(test_table_date_serial_check_values),
        cmocka_unit_test(test_table_date_serial_rejects_invalid_dates),
        cmocka_unit_test(test_table_date_serial_round_trips_every_day),
    };
    return cmocka_run_group_tests_name("table", tests, NULL, NULL);
}
