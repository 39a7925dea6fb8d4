/* test_fileinfo.c: size and SHA-256 of input files. */
#include "testutil.h"

#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "../io/fileinfo.h"

static char *write_temp(const char *bytes, size_t n)
{
    static char path[64];
    snprintf(path, sizeof path, "/tmp/rowfit-fileinfo-XXXXXX");
    int fd = mkstemp(path);
    assert_true(fd >= 0);
    assert_int_equal(write(fd, bytes, n), (ssize_t)n);
    close(fd);
    return path;
}

/* FIPS 180-2, appendix B.1: SHA-256("abc"). */
static void test_fileinfo_hashes_abc_as_fips_180_2(void **state)
{
    (void)state;
    char *path = write_temp("abc", 3);
    fileinfo fi;
    rf_error err = { 0 };
    assert_int_equal(fileinfo_get(path, "abc.csv", &fi, &err), RF_OK);
    assert_int_equal(fi.size, 3);
    assert_string_equal(fi.sha256, "ba7816bf8f01cfea414140de5dae2223"
                                   "b00361a396177a9cb410ff61f20015ad");
    unlink(path);
}

/* FIPS 180-2, appendix B.3: one million 'a' — longer than one read block. */
static void test_fileinfo_hashes_a_million_as_fips_180_2(void **state)
{
    (void)state;
    size_t n = 1000000;
    char *buf = malloc(n);
    assert_non_null(buf);
    memset(buf, 'a', n);
    char *path = write_temp(buf, n);
    free(buf);
    fileinfo fi;
    rf_error err = { 0 };
    assert_int_equal(fileinfo_get(path, "a.csv", &fi, &err), RF_OK);
    assert_int_equal(fi.size, n);
    assert_string_equal(fi.sha256, "cdc76e5c9914fb9281a1c7e284d73e67"
                                   "f1809a48a497200e046d39ccc7112cd0");
    unlink(path);
}

static void test_fileinfo_missing_file_is_a_system_error(void **state)
{
    (void)state;
    fileinfo fi;
    rf_error err = { 0 };
    assert_int_equal(fileinfo_get("/nonexistent/rowfit/x.csv", "x.csv", &fi,
                                  &err), RF_ESYSTEM);
    assert_string_equal(err.where, "x.csv");
    assert_non_null(strstr(err.message, "cannot open"));
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_fileinfo_hashes_abc_as_fips_180_2),
        cmocka_unit_test(test_fileinfo_hashes_a_million_as_fips_180_2),
        cmocka_unit_test(test_fileinfo_missing_file_is_a_system_error),
    };
    return cmocka_run_group_tests_name("fileinfo", tests, NULL, NULL);
}
