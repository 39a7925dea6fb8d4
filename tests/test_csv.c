/*
 * test_csv.c: the CSV reader: quoting, line ends, byte-order mark,
 * delimiters, header row, cell types, locale-free numbers, row source lines,
 * a large generated file, every error path and the bad-input corpus.
 * Fixtures are written into a fresh temporary folder per test.
 */
#include "testutil.h"

#include <errno.h>
#include <locale.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "../io/csv.h"

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
    snprintf(f->dir, sizeof f->dir, "/tmp/rowfit-csv-XXXXXX");
    if (mkdtemp(f->dir) == NULL) {
        free(f);
        return -1;
    }
    *state = f;
    return 0;
}

static int teardown(void **state)
{
    fixture *f = *state;
    table_free(f->t);
    error_warnings_clear(&f->warn);
    if (f->path[0] != '\0')
        unlink(f->path);
    rmdir(f->dir);
    free(f);
    return 0;
}

/* Writes len bytes as the fixture's file (one file per test). */
static const char *write_bytes(fixture *f, const char *bytes, size_t len)
{
    snprintf(f->path, sizeof f->path, "%s/sales.csv", f->dir);
    FILE *fp = fopen(f->path, "wb");
    assert_non_null(fp);
    assert_int_equal(fwrite(bytes, 1, len, fp), len);
    assert_int_equal(fclose(fp), 0);
    return f->path;
}

static const char *write_text(fixture *f, const char *text)
{
    return write_bytes(f, text, strlen(text));
}

static rf_status read_opt(fixture *f, char delim, int header)
{
    csv_options opt = {delim, header};
    table_free(f->t);
    f->t = NULL;
    memset(&f->err, 0, sizeof f->err);
    rf_status s = csv_read(f->path, "sales.csv", &opt, &f->t, &f->warn,
                           &f->err);
    if (s != RF_OK)
        assert_null(f->t);
    return s;
}

static table *read_ok(fixture *f, const char *text)
{
    write_text(f, text);
    rf_status s = read_opt(f, 0, 0);
    if (s != RF_OK)
        fail_msg("csv_read failed: %s: %s", f->err.where, f->err.message);
    return f->t;
}

static void expect_error(fixture *f, rf_status want, const char *where,
                         const char *part)
{
    rf_status s = read_opt(f, 0, 0);
    assert_int_equal(s, want);
    assert_int_equal(f->err.status, want);
    assert_string_equal(f->err.where, where);
    if (strstr(f->err.message, part) == NULL)
        fail_msg("message '%s' lacks '%s'", f->err.message, part);
}

static const char *text_at(const table *t, size_t r, size_t c)
{
    assert_int_equal(table_cell_type(t, r, c), CELL_TEXT);
    return table_cell_text(t, r, c);
}

/* ---- structure -------------------------------------------------------- */

static void test_csv_reads_quoted_newline_and_doubled_quote(void **state)
{
    fixture *f = *state;
    table *t = read_ok(f, "street,note\n"
                          "\"Elm \"\"Old\"\" Road\",\"first line\n"
                          "second, with comma\"\n");
    assert_int_equal(table_rows(t), 1);
    assert_string_equal(text_at(t, 0, 0), "Elm \"Old\" Road");
    assert_string_equal(text_at(t, 0, 1), "first line\nsecond, with comma");
}

static void test_csv_rows_after_multiline_field_keep_their_lines(void **state)
{
    fixture *f = *state;
    table *t = read_ok(f, "id,note\n"            /* 1 */
                          "1,\"a\n"              /* 2 */
                          "b\n"                  /* 3 */
                          "c\"\n"                /* 4 */
                          "2,plain\n"            /* 5 */
                          "\n"                   /* 6: blank, skipped */
                          "3,\"x\r\ny\"\n"       /* 7-8 */
                          "4,last\n");           /* 9 */
    assert_int_equal(table_rows(t), 4);
    assert_int_equal(table_row_source(t, 0), 2);
    assert_int_equal(table_row_source(t, 1), 5);
    assert_int_equal(table_row_source(t, 2), 7);
    assert_int_equal(table_row_source(t, 3), 9);
    char where[64];
    assert_string_equal(table_where(t, 3, 1, where, sizeof where),
                        "sales.csv:9");
    assert_string_equal(text_at(t, 2, 1), "x\ny");
}

static void assert_same_tables(const table *a, const table *b)
{
    assert_int_equal(table_rows(a), table_rows(b));
    assert_int_equal(table_cols(a), table_cols(b));
    for (size_t c = 0; c < table_cols(a); c++)
        assert_string_equal(table_column_name(a, c), table_column_name(b, c));
    for (size_t r = 0; r < table_rows(a); r++) {
        assert_int_equal(table_row_source(a, r), table_row_source(b, r));
        for (size_t c = 0; c < table_cols(a); c++) {
            char x[128], y[128];
            assert_int_equal(table_cell_type(a, r, c),
                             table_cell_type(b, r, c));
            assert_string_equal(table_cell_show(a, r, c, x, sizeof x),
                                table_cell_show(b, r, c, y, sizeof y));
        }
    }
}

static void test_csv_crlf_and_lf_give_identical_tables(void **state)
{
    fixture *f = *state;
    read_ok(f, "price,street,built\n"
               "182450.5,\"Elm\nRoad\",1987-05-02\n"
               "\n"
               "99000,Oak,\n");
    table *lf = f->t;
    f->t = NULL;
    read_ok(f, "price,street,built\r\n"
               "182450.5,\"Elm\r\nRoad\",1987-05-02\r\n"
               "\r\n"
               "99000,Oak,\r\n");
    assert_same_tables(lf, f->t);
    /* Lone CRs, as old Mac files end lines, read the same too. */
    table *crlf = f->t;
    f->t = NULL;
    read_ok(f, "price,street,built\r"
               "182450.5,\"Elm\rRoad\",1987-05-02\r"
               "\r"
               "99000,Oak,\r");
    assert_same_tables(lf, f->t);
    assert_int_equal(table_row_source(f->t, 1), 5);
    /* A lone CR before a non-ASCII character still ends its line. */
    read_ok(f, "name\r\xC3\xA9\n1\n");
    assert_int_equal(table_rows(f->t), 2);
    assert_int_equal(table_row_source(f->t, 1), 3);
    table_free(lf);
    table_free(crlf);
}

static void test_csv_skips_byte_order_mark(void **state)
{
    fixture *f = *state;
    table *t = read_ok(f, "\xEF\xBB\xBFprice;area\n3;4\n");
    assert_string_equal(table_column_name(t, 0), "price");
    assert_int_equal(table_find_column(t, "price"), 0);
    assert_close(table_cell_number(t, 0, 1), 4, 0, 0);
}

static void test_csv_detects_semicolon(void **state)
{
    fixture *f = *state;
    table *t = read_ok(f, "price;area;note\n182,5;120;\"a;b\"\n");
    assert_int_equal(table_cols(t), 3);
    /* A decimal comma stays text (no locale guessing). */
    assert_string_equal(text_at(t, 0, 0), "182,5");
    assert_string_equal(text_at(t, 0, 2), "a;b");
}

static void test_csv_detects_tab(void **state)
{
    fixture *f = *state;
    table *t = read_ok(f, "\n  \nprice\tarea\tstreet, city\n1\t2\tElm, Riverside\n");
    assert_int_equal(table_cols(t), 3);
    assert_string_equal(table_column_name(t, 2), "street, city");
    assert_string_equal(text_at(t, 0, 2), "Elm, Riverside");
    assert_int_equal(table_row_source(t, 0), 4);
}

static void test_csv_detection_counts_outside_quotes_and_ties_to_comma(
    void **state)
{
    fixture *f = *state;
    /* Two ';' inside quotes do not outvote the one ',' outside. */
    table *t = read_ok(f, "\"a;b;c\",d\n1,2\n");
    assert_int_equal(table_cols(t), 2);
    assert_string_equal(table_column_name(t, 0), "a;b;c");
    /* One ',' and one ';': the tie goes to ','. */
    t = read_ok(f, "a,b;c\n1,2;3\n");
    assert_int_equal(table_cols(t), 2);
    assert_string_equal(table_column_name(t, 1), "b;c");
    /* No candidate at all: one column. */
    t = read_ok(f, "price\n1\n2\n");
    assert_int_equal(table_cols(t), 1);
    assert_int_equal(table_rows(t), 2);
}

static void test_csv_uses_given_delimiter(void **state)
{
    fixture *f = *state;
    write_text(f, "a,b;c,d\n1,2;3,4\n");
    assert_int_equal(read_opt(f, ';', 0), RF_OK);
    assert_int_equal(table_cols(f->t), 2);
    assert_string_equal(table_column_name(f->t, 0), "a,b");
    assert_string_equal(text_at(f->t, 0, 1), "3,4");
    assert_int_equal(read_opt(f, '\t', 0), RF_OK);
    assert_int_equal(table_cols(f->t), 1);
}

static void test_csv_reads_header_on_given_line(void **state)
{
    fixture *f = *state;
    write_text(f, "Sales export, spring\n"
                  "made by the county office\n"
                  "\n"
                  "price,area\n"
                  "1,2\n"
                  "3,4\n");
    assert_int_equal(read_opt(f, 0, 4), RF_OK);
    assert_int_equal(table_cols(f->t), 2);
    assert_string_equal(table_column_name(f->t, 1), "area");
    assert_int_equal(table_rows(f->t), 2);
    assert_int_equal(table_row_source(f->t, 0), 5);
    /* Without the header line the first text line is the header. */
    assert_int_equal(read_opt(f, 0, 0), RF_OK);
    assert_int_equal(table_cols(f->t), 2);
    assert_string_equal(table_column_name(f->t, 0), "Sales export");
}

static void test_csv_header_row_must_hold_a_header(void **state)
{
    fixture *f = *state;
    write_text(f, "note\n\nprice,area\n1,2\n");
    assert_int_equal(read_opt(f, 0, 2), RF_EINPUT);
    assert_string_equal(f->err.where, "sales.csv:2");
    assert_non_null(strstr(f->err.message, "no header row on line 2"));
    assert_int_equal(read_opt(f, 0, 9), RF_EINPUT);
    assert_string_equal(f->err.where, "sales.csv:9");
    assert_int_equal(read_opt(f, ',', -1), RF_EINPUT);
    assert_non_null(strstr(f->err.message, "header row -1"));
}

/* ---- cells ------------------------------------------------------------ */

static void test_csv_cell_types_and_column_kinds(void **state)
{
    fixture *f = *state;
    table *t = read_ok(f,
        "price,sold,pool,district,age,empty,garage\n"
        "182450, 2024-01-01 ,TRUE,Riverside,12,,yes\n"
        "99000.5,2024-02-29T14:30,false,\" Hill \",n/a,,No\n"
        "-3e2,1987-05-02 08:15:30,True,  Oak  , ,\"\",TRUE\n");
    assert_int_equal(table_rows(t), 3);
    assert_int_equal(table_column_kind(t, 0), KIND_NUMBER);
    assert_int_equal(table_column_kind(t, 1), KIND_DATE);
    assert_int_equal(table_column_kind(t, 2), KIND_YESNO);
    assert_int_equal(table_column_kind(t, 3), KIND_TEXT);
    assert_int_equal(table_column_kind(t, 4), KIND_MIXED);
    assert_int_equal(table_column_kind(t, 5), KIND_BLANK);
    assert_int_equal(table_column_kind(t, 6), KIND_YESNO);
    assert_int_equal(table_column_blanks(t, 4), 1);
    assert_int_equal(table_column_blanks(t, 5), 3);
    assert_close(table_cell_number(t, 2, 0), -300, 0, 0);
    /* 2024-01-01 = 45292 (libraries.md, verified with libxlsxwriter). */
    assert_close(table_cell_number(t, 0, 1), 45292, 0, 0);
    assert_close(table_cell_number(t, 1, 1), 45292 + 59 + 14.5 / 24, 1e-15,
                 0);
    char buf[64];
    assert_string_equal(table_cell_show(t, 2, 1, buf, sizeof buf),
                        "1987-05-02 08:15:30");
    assert_int_equal(table_cell_type(t, 0, 2), CELL_BOOL);
    assert_close(table_cell_number(t, 1, 2), 0, 0, 0);
    assert_close(table_cell_number(t, 2, 2), 1, 0, 0);
    /* Quoted text is kept as is, unquoted text is trimmed. */
    assert_string_equal(text_at(t, 1, 3), " Hill ");
    assert_string_equal(text_at(t, 2, 3), "Oak");
    assert_string_equal(text_at(t, 1, 4), "n/a");
    assert_int_equal(table_cell_type(t, 2, 4), CELL_BLANK);
}

static void test_csv_malformed_dates_are_text(void **state)
{
    fixture *f = *state;
    table *t = read_ok(f, "d\n2023-02-29\n2024-1-5\n2024-01-05T25:00\n"
                          "2024-01-05 10:00Z\n1899-12-31\n2024-01-05T10\n");
    for (size_t r = 0; r < table_rows(t); r++)
        assert_int_equal(table_cell_type(t, r, 0), CELL_TEXT);
    assert_int_equal(table_rows(t), 6);
}

static void test_csv_fewer_values_leave_cells_blank(void **state)
{
    fixture *f = *state;
    table *t = read_ok(f, "a,b,c\n1\n2,3,4,,  ,\"\"\n");
    assert_int_equal(table_rows(t), 2);
    assert_int_equal(table_cell_type(t, 0, 1), CELL_BLANK);
    assert_int_equal(table_cell_type(t, 0, 2), CELL_BLANK);
    assert_close(table_cell_number(t, 1, 2), 4, 0, 0);
}

static void test_csv_skips_blank_lines_and_trailing_blank_rows(void **state)
{
    fixture *f = *state;
    table *t = read_ok(f, "\n\na,b\n\n1,2\n   \n,\n3,4\n,,\n\n");
    assert_int_equal(table_rows(t), 2);
    assert_int_equal(table_row_source(t, 0), 5);
    assert_int_equal(table_row_source(t, 1), 8);
}

static void test_csv_names_blank_header_cells_with_a_warning(void **state)
{
    fixture *f = *state;
    table *t = read_ok(f, "price,,area,\"\"\n1,2,3,4\n");
    assert_int_equal(table_cols(t), 4);
    assert_string_equal(table_column_name(t, 1), "column B");
    assert_string_equal(table_column_name(t, 3), "column D");
    assert_int_equal(f->warn.n, 2);
    assert_non_null(strstr(f->warn.items[0], "sales.csv:1: "));
    assert_non_null(strstr(f->warn.items[0], "column B"));
    assert_non_null(strstr(f->warn.items[1], "column D"));
}

static void test_csv_text_after_closing_quote_is_kept(void **state)
{
    fixture *f = *state;
    table *t = read_ok(f, "a,b\n\"ab\"c , \"x\"  \n");
    assert_string_equal(text_at(t, 0, 0), "abc");
    assert_string_equal(text_at(t, 0, 1), "x");
}

/* ---- numbers ---------------------------------------------------------- */

static double parse(const char *s)
{
    double v = 12345.678;
    if (!csv_parse_number(s, strlen(s), &v))
        fail_msg("'%s' was not read as a number", s);
    return v;
}

static void refuse(const char *s)
{
    double v = 0;
    if (csv_parse_number(s, strlen(s), &v))
        fail_msg("'%s' was read as the number %.17g", s, v);
}

static void test_csv_parse_number_edge_cases(void **state)
{
    (void)state;
    /* Expected values are C literals, which gcc converts correctly rounded
     * (ISO C 6.4.4.2; glibc/MPFR-based conversion). */
    assert_true(parse("1e-3") == 1e-3);
    assert_true(parse(".5") == 0.5);
    assert_true(parse("760.") == 760.0);
    assert_true(parse(" 12 ") == 12.0);
    assert_true(parse("\t+7.25\t") == 7.25);
    assert_true(parse("0.1") == 0.1);
    assert_true(parse("-2.385E+02") == -238.5);
    assert_true(parse("0000123.4500") == 123.45);
    double z = parse("-0");
    assert_true(z == 0.0 && signbit(z));
    z = parse("0.000e10");
    assert_true(z == 0.0 && !signbit(z));
    /* Past the fast path: more than 2^53, or a power of ten past 10^22,
     * or more than 19 digits. */
    assert_true(parse("9007199254740993") == 9007199254740992.0);
    assert_true(parse("1e23") == 1e23);
    assert_true(parse("123456789012345678901234567890") ==
                123456789012345678901234567890.0);
    assert_true(parse("3.14159265358979323846264338327950288") ==
                3.14159265358979323846264338327950288);
    assert_true(parse("2.2250738585072011e-308") == 2.2250738585072011e-308);
    assert_true(parse("4.9406564584124654e-324") == 4.9406564584124654e-324);
    assert_true(parse("1e-400") == 0.0);
    assert_true(parse("1.7976931348623157e308") == 1.7976931348623157e308);

    refuse("");
    refuse("   ");
    refuse(".");
    refuse("-");
    refuse("+.");
    refuse("e5");
    refuse("1e");
    refuse("1e+");
    refuse("1,234");
    refuse("1 234");
    refuse("1.2.3");
    refuse("--1");
    refuse("0x10");
    refuse("inf");
    refuse("-Infinity");
    refuse("nan");
    refuse("NaN");
    refuse("1e400");
    refuse("$5");
    refuse("5%");
    refuse("12abc");
    /* len is honoured: the text after it is not read. */
    double v = 0;
    assert_true(csv_parse_number("42xyz", 2, &v) && v == 42.0);
}

static void test_csv_parse_number_matches_strtod(void **state)
{
    (void)state;
    /* Oracle: glibc strtod in the C locale, which rounds correctly. Random
     * decimal strings of 1 to 25 digits, a point and an exponent. */
    unsigned long long x = 88172645463325252ULL;  /* xorshift64 seed */
    char s[64];
    for (int k = 0; k < 20000; k++) {
        x ^= x << 13;
        x ^= x >> 7;
        x ^= x << 17;
        int ndig = 1 + (int)(x % 25), point = (int)((x >> 8) % (ndig + 1));
        int e = (int)((x >> 16) % 80) - 40;
        unsigned long long y = x;
        size_t n = 0;
        if ((x >> 40) & 1)
            s[n++] = '-';
        for (int i = 0; i < ndig; i++) {
            if (i == point)
                s[n++] = '.';
            y = y * 6364136223846793005ULL + 1442695040888963407ULL;
            s[n++] = (char)('0' + (y >> 60) % 10);
        }
        n += (size_t)snprintf(s + n, sizeof s - n, "e%d", e);
        double want = strtod(s, NULL);
        double got = 0;
        assert_true(csv_parse_number(s, n, &got));
        if (memcmp(&want, &got, sizeof want) != 0)
            fail_msg("'%s': %.17g, strtod gives %.17g", s, got, want);
    }
}

static void test_csv_numbers_ignore_the_locale(void **state)
{
    fixture *f = *state;
    /* A locale whose decimal separator is ',' (common practice for German
     * number formats); skipped where the locale is not installed. */
    if (setlocale(LC_NUMERIC, "de_DE.UTF-8") == NULL &&
        setlocale(LC_NUMERIC, "de_DE.utf8") == NULL) {
        print_message("de_DE.UTF-8 locale not installed: part skipped\n");
        skip();
    }
    assert_true(strtod("3,5", NULL) == 3.5);  /* the locale is in force */
    table *t = read_ok(f, "price;area\n3.5;1e23\n\"3,5\";7\n");
    double p = table_cell_number(t, 0, 0);
    double a = table_cell_number(t, 0, 1);
    int rows = (int)table_rows(t);
    cell_type comma = table_cell_type(t, 1, 0);
    double v = 0;
    int slow = csv_parse_number("2.2250738585072011e-308", 23, &v);
    setlocale(LC_NUMERIC, "C");
    assert_int_equal(rows, 2);
    assert_true(p == 3.5);
    assert_true(a == 1e23);
    assert_int_equal(comma, CELL_TEXT);
    assert_true(slow && v == 2.2250738585072011e-308);
}

/* ---- size ------------------------------------------------------------- */

static void test_csv_reads_200000_generated_rows(void **state)
{
    fixture *f = *state;
    snprintf(f->path, sizeof f->path, "%s/sales.csv", f->dir);
    FILE *fp = fopen(f->path, "wb");
    assert_non_null(fp);
    fputs("id,price,area,district,sold\n", fp);
    const int n = 200000;
    for (int i = 0; i < n; i++)
        fprintf(fp, "%d,%d.%02d,%d,\"Dist %d\",2024-%02d-%02d\n", i + 1,
                100000 + i, i % 100, 50 + i % 300, i % 7, 1 + i % 12,
                1 + i % 28);
    assert_int_equal(fclose(fp), 0);
    assert_int_equal(read_opt(f, 0, 0), RF_OK);
    table *t = f->t;
    assert_int_equal(table_rows(t), (size_t)n);
    assert_int_equal(table_row_source(t, (size_t)n - 1), (uint32_t)n + 1);
    assert_close(table_cell_number(t, 123456, 1), 100000 + 123456 + 0.56, 0,
                 0);
    char want[32];
    snprintf(want, sizeof want, "Dist %d", (n - 1) % 7);
    assert_string_equal(table_cell_text(t, (size_t)n - 1, 3), want);
    assert_int_equal(table_column_kind(t, 1), KIND_NUMBER);
    assert_int_equal(table_column_kind(t, 4), KIND_DATE);
}

/* ---- errors ----------------------------------------------------------- */

static void test_csv_rejects_empty_file(void **state)
{
    fixture *f = *state;
    write_text(f, "");
    expect_error(f, RF_EINPUT, "sales.csv", "file is empty");
    write_text(f, "\xEF\xBB\xBF");
    expect_error(f, RF_EINPUT, "sales.csv", "file is empty");
    write_text(f, "\r\n  \n\t\n,,\n");
    expect_error(f, RF_EINPUT, "sales.csv", "file is empty");
}

static void test_csv_rejects_binary_file(void **state)
{
    fixture *f = *state;
    write_bytes(f, "id\0\x01\x02,x\n", 9);
    expect_error(f, RF_EINPUT, "sales.csv:1", "binary file, not CSV text");
    /* A workbook saved under a .csv name gets a hint. */
    write_bytes(f, "PK\x03\x04\x14\0\0\0", 8);
    expect_error(f, RF_EINPUT, "sales.csv:1", "looks like a spreadsheet");
}

static void test_csv_rejects_nul_after_first_block(void **state)
{
    fixture *f = *state;
    size_t n = 70000;
    char *buf = malloc(n);
    assert_non_null(buf);
    memcpy(buf, "a,b\n", 4);
    for (size_t i = 4; i < n; i += 4)
        memcpy(buf + i, "1,2\n", 4);
    buf[n - 2] = '\0';  /* on line 17500 */
    write_bytes(f, buf, n);
    free(buf);
    expect_error(f, RF_EINPUT, "sales.csv", "NUL byte on line 17500");
}

static void test_csv_rejects_invalid_utf8(void **state)
{
    fixture *f = *state;
    /* Latin-1 e-acute; the message names the line and the byte. */
    write_text(f, "street,price\nElm,1\nCaf\xE9 Road,2\n");
    expect_error(f, RF_EINPUT, "sales.csv:3", "not valid UTF-8 (byte 0xE9)");
    /* The Unicode Standard, table 3-7: an overlong form, a surrogate, a
     * stray continuation byte and a sequence cut off by the end. */
    write_text(f, "a\n\xC0\xAF\n");
    expect_error(f, RF_EINPUT, "sales.csv:2", "byte 0xC0");
    write_text(f, "a\nx\n\"\xED\xA0\x80\"\n");
    expect_error(f, RF_EINPUT, "sales.csv:3", "byte 0xED");
    write_text(f, "a\n\x80\n");
    expect_error(f, RF_EINPUT, "sales.csv:2", "byte 0x80");
    write_text(f, "a\nok\xE2\x82");
    expect_error(f, RF_EINPUT, "sales.csv:2", "byte 0xE2");
    /* Valid two-, three- and four-byte characters pass. */
    table *t = read_ok(f, "name\nCaf\xC3\xA9\n\xE2\x82\xAC\n\xF0\x9F\x8F\xA0\n");
    assert_string_equal(text_at(t, 0, 0), "Caf\xC3\xA9");
    assert_string_equal(text_at(t, 2, 0), "\xF0\x9F\x8F\xA0");
}

static void test_csv_rejects_quote_never_closed(void **state)
{
    fixture *f = *state;
    write_text(f, "street,note\nElm,ok\nOak,\"starts here\nand goes on\n"
                  "Ash,3\n");
    expect_error(f, RF_EINPUT, "sales.csv:3", "never closed");
}

static void test_csv_rejects_overlong_value(void **state)
{
    fixture *f = *state;
    size_t n = (1u << 20) + 100;
    char *buf = malloc(n);
    assert_non_null(buf);
    memset(buf, 'x', n);
    memcpy(buf, "a,b\n1,2\n3,\"", 11);
    buf[n - 1] = '"';
    write_bytes(f, buf, n);
    free(buf);
    expect_error(f, RF_EINPUT, "sales.csv:3", "closing quote missing");
}

static void test_csv_rejects_duplicate_headers(void **state)
{
    fixture *f = *state;
    write_text(f, "id,price,area, price\n1,2,3,4\n");
    expect_error(f, RF_EINPUT, "sales.csv:1",
                 "duplicate column name 'price' in column D (also in "
                 "column B)");
}

static void test_csv_rejects_row_with_too_many_values(void **state)
{
    fixture *f = *state;
    write_text(f, "street,price\nElm,1\nOak, Hill,2\n");
    expect_error(f, RF_EINPUT, "sales.csv:3", "3 values");
    assert_non_null(strstr(f->err.message, "names 2 columns"));
    /* Extra fields that are all empty are ignored. */
    table *t = read_ok(f, "street,price\nElm,1,,  ,\"\"\n");
    assert_int_equal(table_rows(t), 1);
}

static void test_csv_reports_unopenable_file(void **state)
{
    fixture *f = *state;
    snprintf(f->path, sizeof f->path, "%s/missing.csv", f->dir);
    expect_error(f, RF_ESYSTEM, "sales.csv", strerror(ENOENT));
    f->path[0] = '\0';
}

static void test_csv_reports_unreadable_file(void **state)
{
    fixture *f = *state;
    /* A folder opens but cannot be read (EISDIR), in the detection pass
     * and, with a given delimiter, in the main pass. */
    snprintf(f->path, sizeof f->path, "%s", f->dir);
    expect_error(f, RF_ESYSTEM, "sales.csv", strerror(EISDIR));
    assert_int_equal(read_opt(f, ',', 0), RF_ESYSTEM);
    assert_non_null(strstr(f->err.message, strerror(EISDIR)));
    f->path[0] = '\0';
}

/* ---- the bad-input corpus --------------------------------------------- */

/* tests/bad/ beside this source file (the Makefile builds from the top). */
static void corpus_path(char *buf, size_t n, const char *file)
{
    const char *src = __FILE__;
    const char *slash = strrchr(src, '/');
    int dir = slash ? (int)(slash - src) : 0;
    snprintf(buf, n, "%.*s%sbad/%s", dir, src, slash ? "/" : "", file);
}

static void corpus_expect(const char *file, rf_status want, const char *part)
{
    char path[512];
    corpus_path(path, sizeof path, file);
    table *t = NULL;
    rf_warnings w = {0};
    rf_error e = {0};
    rf_status s = csv_read(path, file, NULL, &t, &w, &e);
    if (s != want)
        fail_msg("%s: status %s (%s: %s), expected %s", file,
                 error_status_str(s), e.where, e.message,
                 error_status_str(want));
    if (part != NULL && strstr(e.message, part) == NULL)
        fail_msg("%s: message '%s' lacks '%s'", file, e.message, part);
    table_free(t);
    error_warnings_clear(&w);
}

static void test_csv_bad_corpus_gives_clear_errors(void **state)
{
    (void)state;
    corpus_expect("csv-quote-never-closed.csv", RF_EINPUT, "never closed");
    corpus_expect("csv-duplicate-headers.csv", RF_EINPUT, "duplicate");
    corpus_expect("csv-empty.csv", RF_EINPUT, "file is empty");
    corpus_expect("csv-binary.csv", RF_EINPUT, "binary file");
    corpus_expect("csv-invalid-utf8.csv", RF_EINPUT, "not valid UTF-8");
    corpus_expect("csv-too-many-fields.csv", RF_EINPUT, "values but");
    corpus_expect("csv-non-numeric-input.csv", RF_OK, NULL);
}

static void test_csv_corpus_non_numeric_cell_makes_column_mixed(void **state)
{
    (void)state;
    char path[512];
    corpus_path(path, sizeof path, "csv-non-numeric-input.csv");
    table *t = NULL;
    rf_error e = {0};
    assert_int_equal(csv_read(path, "in.csv", NULL, &t, NULL, &e), RF_OK);
    long age = table_find_column(t, "age");
    assert_true(age >= 0);
    assert_int_equal(table_column_kind(t, (size_t)age), KIND_MIXED);
    size_t texts = 0;
    for (size_t r = 0; r < table_rows(t); r++)
        if (table_cell_type(t, r, (size_t)age) == CELL_TEXT) {
            assert_string_equal(table_cell_text(t, r, (size_t)age), "n/a");
            texts++;
        }
    assert_int_equal(texts, 1);
    table_free(t);
}

#define T(name) cmocka_unit_test_setup_teardown(name, setup, teardown)

int main(void)
{
    const struct CMUnitTest tests[] = {
        T(test_csv_reads_quoted_newline_and_doubled_quote),
        T(test_csv_rows_after_multiline_field_keep_their_lines),
        T(test_csv_crlf_and_lf_give_identical_tables),
        T(test_csv_skips_byte_order_mark),
        T(test_csv_detects_semicolon),
        T(test_csv_detects_tab),
        T(test_csv_detection_counts_outside_quotes_and_ties_to_comma),
        T(test_csv_uses_given_delimiter),
        T(test_csv_reads_header_on_given_line),
        T(test_csv_header_row_must_hold_a_header),
        T(test_csv_cell_types_and_column_kinds),
        T(test_csv_malformed_dates_are_text),
        T(test_csv_fewer_values_leave_cells_blank),
        T(test_csv_skips_blank_lines_and_trailing_blank_rows),
        T(test_csv_names_blank_header_cells_with_a_warning),
        T(test_csv_text_after_closing_quote_is_kept),
        T(test_csv_parse_number_edge_cases),
        T(test_csv_parse_number_matches_strtod),
        T(test_csv_numbers_ignore_the_locale),
        T(test_csv_reads_200000_generated_rows),
        T(test_csv_rejects_empty_file),
        T(test_csv_rejects_binary_file),
        T(test_csv_rejects_nul_after_first_block),
        T(test_csv_rejects_invalid_utf8),
        T(test_csv_rejects_quote_never_closed),
        T(test_csv_rejects_overlong_value),
        T(test_csv_rejects_duplicate_headers),
        T(test_csv_rejects_row_with_too_many_values),
        T(test_csv_reports_unopenable_file),
        T(test_csv_reports_unreadable_file),
        T(test_csv_bad_corpus_gives_clear_errors),
        T(test_csv_corpus_non_numeric_cell_makes_column_mixed),
    };
    return cmocka_run_group_tests_name("csv", tests, NULL, NULL);
}
