/* test_grid.c: the header and shape rules every spreadsheet reader shares. */
#include "testutil.h"

#include <string.h>

#include "../io/grid.h"

static int has_warning(const rf_warnings *w, const char *part)
{
    for (size_t i = 0; i < w->n; i++)
        if (strstr(w->items[i], part))
            return 1;
    return 0;
}

static table *finish_ok(grid *g, rf_warnings *w)
{
    table *t = NULL;
    rf_error e = { 0 };
    if (grid_finish(g, &t, w, &e) != RF_OK) {
        print_error("grid_finish: %s: %s\n", e.where, e.message);
        fail();
    }
    grid_free(g);
    return t;
}

#define TXT(g, r, c, s) assert_int_equal(grid_text(g, r, c, s, strlen(s), &e), RF_OK)
#define NUM(g, r, c, v) assert_int_equal(grid_number(g, r, c, v, &e), RF_OK)

/* Title lines and blank rows above the table: the first non-blank row is
 * the header only when the job names none; with `header 3` rows 1-2 are
 * skipped whatever they hold. */
static void test_grid_header_is_first_nonblank_row_or_the_named_one(void **state)
{
    (void)state;
    rf_error e = { 0 };
    rf_warnings w = { 0 };
    grid *g = grid_create("sales.xlsx", "Closed sales", 0);
    TXT(g, 3, 1, "area");
    TXT(g, 3, 2, "price");
    NUM(g, 4, 1, 94.25);
    NUM(g, 4, 2, 182450);
    NUM(g, 6, 1, 121.5);     /* row 5 blank: skipped, row 6 keeps its number */
    table *t = finish_ok(g, &w);
    assert_int_equal(table_cols(t), 2);
    assert_string_equal(table_column_name(t, 0), "area");
    assert_int_equal(table_rows(t), 2);
    assert_int_equal(table_row_source(t, 1), 6);
    assert_int_equal(table_cell_type(t, 1, 1), CELL_BLANK);
    char where[128];
    assert_string_equal(table_where(t, 1, 0, where, sizeof where),
                        "sales.xlsx[Closed sales]!B6");
    table_free(t);

    g = grid_create("sales.xlsx", "Closed sales", 3);
    TXT(g, 1, 0, "Brackenquill County sales, 2026");   /* a title */
    TXT(g, 3, 0, "area");
    NUM(g, 4, 0, 88.5);
    t = finish_ok(g, &w);
    assert_string_equal(table_column_name(t, 0), "area");
    assert_int_equal(table_rows(t), 1);
    table_free(t);
    error_warnings_clear(&w);
}

/* A merged header cell B1:C1 leaves C1 blank: C's data makes "column C"
 * with a warning; a blank header over no data makes no column at all. */
static void test_grid_blank_header_over_data_is_named_after_its_column(void **state)
{
    (void)state;
    rf_error e = { 0 };
    rf_warnings w = { 0 };
    grid *g = grid_create("s.ods", "Plots", 0);
    TXT(g, 1, 0, "id");
    TXT(g, 1, 1, "price");
    TXT(g, 1, 2, "   ");         /* spaces only: a blank name */
    TXT(g, 2, 0, "P-1");
    NUM(g, 2, 1, 1.5);
    NUM(g, 2, 2, 7.25);
    TXT(g, 3, 0, "P-2");
    NUM(g, 3, 6, 4);             /* far right, under nothing */
    table *t = finish_ok(g, &w);
    assert_int_equal(table_cols(t), 4);
    assert_string_equal(table_column_name(t, 2), "column C");
    assert_string_equal(table_column_name(t, 3), "column G");
    assert_true(has_warning(&w, "s.ods[Plots]!C1: warning: the header cell is blank"));
    assert_true(has_warning(&w, "'column G'"));
    /* the late column is blank in the row before it began */
    assert_int_equal(table_cell_type(t, 0, 3), CELL_BLANK);
    assert_close(table_cell_number(t, 1, 3), 4, 0, 0);
    table_free(t);
    error_warnings_clear(&w);
}

static void test_grid_header_cells_of_every_type_become_names(void **state)
{
    (void)state;
    rf_error e = { 0 };
    rf_warnings w = { 0 };
    grid *g = grid_create("s.xlsx", "S", 0);
    NUM(g, 1, 0, 2026);
    /* 45292 is 2024-01-01 in the 1900 system (libraries.md check value) */
    assert_int_equal(grid_date(g, 1, 1, 45292, &e), RF_OK);
    assert_int_equal(grid_bool(g, 1, 2, 1, &e), RF_OK);
    NUM(g, 2, 0, 1);
    table *t = finish_ok(g, &w);
    assert_string_equal(table_column_name(t, 0), "2026");
    assert_string_equal(table_column_name(t, 1), "2024-01-01");
    assert_string_equal(table_column_name(t, 2), "TRUE");
    table_free(t);
}

static void test_grid_duplicate_headers_name_both_cells(void **state)
{
    (void)state;
    rf_error e = { 0 };
    rf_warnings w = { 0 };
    table *t = NULL;
    grid *g = grid_create("sales.xlsx", "S", 0);
    TXT(g, 2, 1, "price");
    TXT(g, 2, 3, "price");
    rf_status st = grid_number(g, 3, 1, 1, &e);
    if (st == RF_OK)
        st = grid_finish(g, &t, &w, &e);
    assert_int_equal(st, RF_EINPUT);
    assert_string_equal(e.where, "sales.xlsx[S]!D2");
    assert_non_null(strstr(e.message, "also in B2"));
    assert_null(t);
    grid_free(g);
}

static void test_grid_rejects_cells_out_of_order_or_beyond_the_sheet(void **state)
{
    (void)state;
    rf_error e = { 0 };
    grid *g = grid_create("s.xlsx", "S", 0);
    TXT(g, 5, 3, "a");
    assert_int_equal(grid_number(g, 5, 2, 1, &e), RF_EINPUT);
    assert_non_null(strstr(e.message, "out of order"));
    assert_int_equal(grid_number(g, 4, 9, 1, &e), RF_EINPUT);
    grid_free(g);
    g = grid_create("s.xlsx", "S", 0);
    assert_int_equal(grid_number(g, GRID_ROWS_MAX + 1, 0, 1, &e), RF_EINPUT);
    assert_non_null(strstr(e.message, "beyond what a sheet can hold"));
    assert_int_equal(grid_number(g, 1, GRID_COLS_MAX, 1, &e), RF_EINPUT);
    assert_int_equal(grid_number(g, 0, 0, 1, &e), RF_EINPUT);
    grid_free(g);
}

static void test_grid_empty_sheet_or_header_past_the_end_is_an_error(void **state)
{
    (void)state;
    rf_error e = { 0 };
    rf_warnings w = { 0 };
    table *t = NULL;
    grid *g = grid_create("s.xlsx", "Empty", 0);
    TXT(g, 4, 0, "");            /* empty text is blank */
    assert_int_equal(grid_finish(g, &t, &w, &e), RF_EINPUT);
    assert_non_null(strstr(e.message, "empty"));
    assert_string_equal(e.where, "s.xlsx[Empty]");
    grid_free(g);
    g = grid_create("s.xlsx", "S", 40);
    TXT(g, 1, 0, "area");
    NUM(g, 2, 0, 3);
    assert_int_equal(grid_finish(g, &t, &w, &e), RF_EINPUT);
    assert_non_null(strstr(e.message, "no header on row 40"));
    assert_non_null(strstr(e.message, "last used row is 2"));
    grid_free(g);
}

/* `header 3` naming a blank row inside the sheet is the same mistake as
 * one past its end; a cell of spaces is blank, so it cannot be the header
 * (found in review: "   " in A1 made the real header row data). */
static void test_grid_blank_named_header_row_and_space_cells(void **state)
{
    (void)state;
    rf_error e = { 0 };
    rf_warnings w = { 0 };
    grid *g = grid_create("gap.xlsx", "S", 3);
    TXT(g, 2, 0, "area");
    assert_int_equal(grid_number(g, 4, 0, 5, &e), RF_EINPUT);
    assert_non_null(strstr(e.message, "no header on row 3: the row is blank"));
    grid_free(g);

    g = grid_create("ws.xlsx", "S", 0);
    TXT(g, 1, 0, "   ");
    TXT(g, 2, 0, "area");
    NUM(g, 3, 0, 5);
    TXT(g, 4, 0, " \t ");      /* a data cell of spaces: blank */
    table *t = finish_ok(g, &w);
    assert_string_equal(table_column_name(t, 0), "area");
    assert_int_equal(table_rows(t), 1);
    table_free(t);
    error_warnings_clear(&w);
}

static void test_grid_reports_the_used_size(void **state)
{
    (void)state;
    rf_error e = { 0 };
    grid *g = grid_create("s.xlsx", "S", 0);
    uint32_t r, c;
    grid_used(g, &r, &c);
    assert_true(r == 0 && c == 0);
    TXT(g, 2, 1, "a");
    NUM(g, 9, 4, 1);
    TXT(g, 12, 7, "");           /* blank: not used */
    grid_used(g, &r, &c);
    assert_int_equal(r, 9);
    assert_int_equal(c, 5);
    grid_free(g);
}

static void test_grid_picks_sheets_by_name_case_or_number(void **state)
{
    (void)state;
    const char *names[] = { "Closed sales", "Listings", "2026" };
    size_t k;
    rf_error e = { 0 };
    assert_int_equal(grid_pick_sheet("s.xlsx", NULL, names, 3, &k, &e), RF_OK);
    assert_int_equal(k, 0);
    assert_int_equal(grid_pick_sheet("s.xlsx", "Listings", names, 3, &k, &e), RF_OK);
    assert_int_equal(k, 1);
    assert_int_equal(grid_pick_sheet("s.xlsx", "closed SALES", names, 3, &k, &e), RF_OK);
    assert_int_equal(k, 0);
    /* a sheet named "2026" wins over sheet number 2026 */
    assert_int_equal(grid_pick_sheet("s.xlsx", "2026", names, 3, &k, &e), RF_OK);
    assert_int_equal(k, 2);
    assert_int_equal(grid_pick_sheet("s.xlsx", "2", names, 3, &k, &e), RF_OK);
    assert_int_equal(k, 1);
    assert_int_equal(grid_pick_sheet("s.xlsx", "7", names, 3, &k, &e), RF_EINPUT);
    assert_non_null(strstr(e.message, "no sheet 7"));
    assert_int_equal(grid_pick_sheet("s.xlsx", "Sold", names, 3, &k, &e), RF_EINPUT);
    assert_non_null(strstr(e.message, "'Closed sales', 'Listings', '2026'"));
    assert_int_equal(grid_pick_sheet("s.xlsx", NULL, names, 0, &k, &e), RF_EINPUT);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_grid_header_is_first_nonblank_row_or_the_named_one),
        cmocka_unit_test(test_grid_blank_header_over_data_is_named_after_its_column),
        cmocka_unit_test(test_grid_header_cells_of_every_type_become_names),
        cmocka_unit_test(test_grid_duplicate_headers_name_both_cells),
        cmocka_unit_test(test_grid_rejects_cells_out_of_order_or_beyond_the_sheet),
        cmocka_unit_test(test_grid_empty_sheet_or_header_past_the_end_is_an_error),
        cmocka_unit_test(test_grid_blank_named_header_row_and_space_cells),
        cmocka_unit_test(test_grid_reports_the_used_size),
        cmocka_unit_test(test_grid_picks_sheets_by_name_case_or_number),
    };
    return cmocka_run_group_tests_name("grid", tests, NULL, NULL);
}
