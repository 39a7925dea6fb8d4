/*
 * test_table_cells.c: table_append_cells and the row stage behind every
 * setter (io/table.c): cells read back the same whether their row is still
 * staged or already in the columns, across stage flushes, late columns,
 * table_set_* on a staged row, trimming, and the error paths.
 */
#include "testutil.h"

#include <string.h>

#include "../io/table.h"

static table *make(size_t ncols)
{
    table *t = table_create("sales.csv", NULL);
    assert_non_null(t);
    rf_error e;
    for (size_t c = 0; c < ncols; c++) {
        char name[24];
        snprintf(name, sizeof name, "c%zu", c);
        assert_int_equal(table_add_column(t, name, (uint32_t)c, 1, &e),
                         RF_OK);
    }
    return t;
}

/* Row r, column c of the test pattern: numbers, a date, text, yes-no
 * text, a boolean and blanks in a fixed mix. */
static table_cell_in pattern(size_t r, size_t c, char *buf, size_t n)
{
    table_cell_in in = {CELL_BLANK, 0.0, NULL, 0};
    switch ((r + c) % 6) {
    case 0: in.type = CELL_NUMBER; in.num = (double)r * 2.385 + (double)c; break;
    case 1: in.type = CELL_DATE; in.num = 46000.0 + (double)r; break;
    case 2:
        snprintf(buf, n, "S-%05zu", r);
        in.type = CELL_TEXT; in.text = buf; in.len = strlen(buf);
        break;
    case 3: in.type = CELL_TEXT; in.text = " yes"; in.len = 4; break;
    case 4: in.type = CELL_BOOL; in.num = (double)(r % 2); break;
    default: break;
    }
    return in;
}

static void check_row(const table *t, size_t r, size_t ncols)
{
    for (size_t c = 0; c < ncols; c++) {
        char buf[32];
        table_cell_in in = pattern(r, c, buf, sizeof buf);
        assert_int_equal(table_cell_type(t, r, c), in.type);
        if (in.type == CELL_TEXT)
            assert_string_equal(table_cell_text(t, r, c), in.text);
        else if (in.type != CELL_BLANK)
            assert_close(table_cell_number(t, r, c), in.num, 0, 0);
        else
            assert_null(table_cell_text(t, r, c));
    }
}

static void test_table_append_cells_reads_back_staged_and_flushed_rows(
    void **state)
{
    (void)state;
    const size_t ncols = 5, nrows = 1000;  /* many stage flushes */
    table *t = make(ncols);
    rf_error e;
    for (size_t r = 0; r < nrows; r++) {
        table_cell_in cells[5];
        char bufs[5][32];
        for (size_t c = 0; c < ncols; c++)
            cells[c] = pattern(r, c, bufs[c], sizeof bufs[c]);
        assert_int_equal(table_append_cells(t, (uint32_t)(r + 2), cells,
                                            ncols, &e), RF_OK);
        /* The newest row is read from the stage, the first from a column. */
        check_row(t, r, ncols);
        check_row(t, 0, ncols);
    }
    assert_int_equal(table_rows(t), nrows);
    for (size_t r = 0; r < nrows; r++) {
        check_row(t, r, ncols);
        assert_int_equal(table_row_source(t, r), r + 2);
    }
    /* Each column holds every kind once in six rows, so all are mixed;
     * the blanks are counted from the type counts. */
    for (size_t c = 0; c < ncols; c++) {
        assert_int_equal(table_column_kind(t, c), KIND_MIXED);
        size_t blanks = 0;
        for (size_t r = 0; r < nrows; r++)
            blanks += (r + c) % 6 == 5;
        assert_int_equal(table_column_blanks(t, c), blanks);
    }
    table_free(t);
}

static void test_table_append_cells_fewer_cells_leaves_rest_blank(
    void **state)
{
    (void)state;
    table *t = make(3);
    rf_error e;
    table_cell_in one = {CELL_NUMBER, 4.5, NULL, 0};
    assert_int_equal(table_append_cells(t, 2, &one, 1, &e), RF_OK);
    assert_int_equal(table_cell_type(t, 0, 0), CELL_NUMBER);
    assert_int_equal(table_cell_type(t, 0, 1), CELL_BLANK);
    assert_int_equal(table_cell_type(t, 0, 2), CELL_BLANK);
    assert_int_equal(table_column_kind(t, 0), KIND_NUMBER);
    assert_int_equal(table_column_kind(t, 1), KIND_BLANK);
    table_free(t);
}

static void test_table_yesno_kind_from_staged_text(void **state)
{
    (void)state;
    table *t = make(1);
    rf_error e;
    const char *words[] = {"Yes", " no", "TRUE", "false "};
    for (size_t r = 0; r < 4; r++) {
        table_cell_in in = {CELL_TEXT, 0, words[r], strlen(words[r])};
        assert_int_equal(table_append_cells(t, (uint32_t)r + 2, &in, 1, &e),
                         RF_OK);
    }
    assert_int_equal(table_column_kind(t, 0), KIND_YESNO);
    /* Overwriting a staged yes-no text with other text uncounts it. */
    assert_int_equal(table_set_text(t, 0, "maybe", 5, &e), RF_OK);
    assert_int_equal(table_column_kind(t, 0), KIND_TEXT);
    assert_string_equal(table_cell_text(t, 3, 0), "maybe");
    table_free(t);
}

static void test_table_setters_write_the_staged_last_row(void **state)
{
    (void)state;
    table *t = make(2);
    rf_error e;
    for (uint32_t r = 0; r < 200; r++) {
        assert_int_equal(table_append_row(t, r + 2, &e), RF_OK);
        assert_int_equal(table_set_number(t, 0, r * 1.25, &e), RF_OK);
        if (r % 3 == 0)
            assert_int_equal(table_set_error(t, 1, "#N/A", 4, &e), RF_OK);
    }
    for (size_t r = 0; r < 200; r++) {
        assert_close(table_cell_number(t, r, 0), (double)r * 1.25, 0, 0);
        if (r % 3 == 0)
            assert_string_equal(table_cell_text(t, r, 1), "#N/A");
        else
            assert_int_equal(table_cell_type(t, r, 1), CELL_BLANK);
    }
    char buf[64];
    assert_string_equal(table_cell_show(t, 199, 0, buf, sizeof buf),
                        "248.75");
    table_free(t);
}

static void test_table_late_column_after_staged_rows(void **state)
{
    (void)state;
    table *t = make(1);
    rf_error e;
    for (uint32_t r = 0; r < 70; r++) {  /* one flush, six rows staged */
        table_cell_in in = {CELL_NUMBER, r, NULL, 0};
        assert_int_equal(table_append_cells(t, r + 2, &in, 1, &e), RF_OK);
    }
    assert_int_equal(table_add_column(t, "late", 5, 1, &e), RF_OK);
    for (size_t r = 0; r < 70; r++) {
        assert_close(table_cell_number(t, r, 0), (double)r, 0, 0);
        assert_int_equal(table_cell_type(t, r, 1), CELL_BLANK);
    }
    table_cell_in two[2] = {{CELL_NUMBER, 7, NULL, 0},
                            {CELL_TEXT, 0, "x", 1}};
    assert_int_equal(table_append_cells(t, 72, two, 2, &e), RF_OK);
    assert_string_equal(table_cell_text(t, 70, 1), "x");
    assert_int_equal(table_column_blanks(t, 1), 70);
    table_free(t);
}

static void test_table_trim_drops_staged_blank_rows(void **state)
{
    (void)state;
    table *t = make(2);
    rf_error e;
    table_cell_in in = {CELL_NUMBER, 1.5, NULL, 0};
    assert_int_equal(table_append_cells(t, 2, &in, 1, &e), RF_OK);
    for (uint32_t r = 0; r < 3; r++)
        assert_int_equal(table_append_cells(t, r + 3, NULL, 0, &e), RF_OK);
    table_trim(t);
    assert_int_equal(table_rows(t), 1);
    assert_close(table_cell_number(t, 0, 0), 1.5, 0, 0);
    table_free(t);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_table_append_cells_reads_back_staged_and_flushed_rows),
        cmocka_unit_test(test_table_append_cells_fewer_cells_leaves_rest_blank),
        cmocka_unit_test(test_table_yesno_kind_from_staged_text),
        cmocka_unit_test(test_table_setters_write_the_staged_last_row),
        cmocka_unit_test(test_table_late_column_after_staged_rows),
        cmocka_unit_test(test_table_trim_drops_staged_blank_rows),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
