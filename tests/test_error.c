/* test_error.c: error records, exit codes and the warning list. */
#include "testutil.h"

#include <string.h>

#include "../io/error.h"

static void test_error_set_fills_place_and_message(void **state)
{
    (void)state;
    rf_error e = { 0 };
    assert_int_equal(error_set(&e, RF_EINPUT, "spring.job:7",
                               "unknown column '%s'", "bathroms"), RF_EINPUT);
    assert_int_equal(e.status, RF_EINPUT);
    assert_string_equal(e.where, "spring.job:7");
    assert_string_equal(e.message, "unknown column 'bathroms'");
    assert_int_equal(error_set(NULL, RF_ESYSTEM, NULL, "x"), RF_ESYSTEM);
    error_set(&e, RF_ENOMEM, NULL, "y");
    assert_string_equal(e.where, "");
}

/* contract section 1: 0 done, 1 job or data wrong, 2 command line, 3 system */
static void test_error_exit_codes_follow_the_contract(void **state)
{
    (void)state;
    assert_int_equal(error_exit_code(RF_OK), 0);
    assert_int_equal(error_exit_code(RF_EINPUT), 1);
    assert_int_equal(error_exit_code(RF_EUSAGE), 2);
    assert_int_equal(error_exit_code(RF_ESYSTEM), 3);
    assert_int_equal(error_exit_code(RF_ENOMEM), 3);
    assert_string_equal(error_status_str(RF_EINPUT), "bad input");
}

static void test_error_long_message_is_cut_not_overflowed(void **state)
{
    (void)state;
    char big[3000];
    memset(big, 'x', sizeof big - 1);
    big[sizeof big - 1] = '\0';
    rf_error e = { 0 };
    error_set(&e, RF_EINPUT, big, "%s", big);
    assert_int_equal(strlen(e.where), ERROR_WHERE_MAX - 1);
    assert_int_equal(strlen(e.message), ERROR_MESSAGE_MAX - 1);
}

static void test_error_warnings_are_capped_and_counted(void **state)
{
    (void)state;
    rf_warnings w = { 0 };
    assert_int_equal(error_warn(&w, "sales.csv:3", "odd %d", 1), RF_OK);
    assert_string_equal(w.items[0], "sales.csv:3: warning: odd 1");
    assert_int_equal(error_warn(&w, "", "no place"), RF_OK);
    assert_string_equal(w.items[1], "warning: no place");
    for (int i = 0; i < ERROR_WARNINGS_MAX + 10; i++)
        assert_int_equal(error_warn(&w, NULL, "w%d", i), RF_OK);
    assert_int_equal(w.n, ERROR_WARNINGS_MAX);
    assert_int_equal(w.dropped, 12);
    error_warnings_clear(&w);
    assert_int_equal(w.n, 0);
    assert_null(w.items);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_error_set_fills_place_and_message),
        cmocka_unit_test(test_error_exit_codes_follow_the_contract),
        cmocka_unit_test(test_error_long_message_is_cut_not_overflowed),
        cmocka_unit_test(test_error_warnings_are_capped_and_counted),
    };
    return cmocka_run_group_tests_name("error", tests, NULL, NULL);
}
