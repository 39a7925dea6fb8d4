/*
 * test_formula.c: the derive formula language (engine/formula.c): parsing,
 * precedence, every function, every error message, lazy IF, references and
 * printing back as a spreadsheet formula.
 */
#include <locale.h>
#include <stdlib.h>
#include <string.h>

#include "testutil.h"
#include "../engine/formula.h"

/* ---- helpers ------------------------------------------------------------ */

static formula *parse_ok(const char *src)
{
    formula *f = NULL;
    rf_error err = {0};
    rf_status st = formula_parse(src, "t.job:1", &f, &err);
    if (st != RF_OK)
        fail_msg("parse of \"%s\" failed: %s", src, err.message);
    assert_non_null(f);
    return f;
}

/* Parses src expecting failure with a message containing want. */
static void parse_fails(const char *src, const char *want)
{
    formula *f = (formula *)1;
    rf_error err = {0};
    rf_status st = formula_parse(src, "spring.job:7", &f, &err);
    if (st == RF_OK)
        fail_msg("\"%s\" parsed but should fail with '%s'", src, want);
    assert_int_equal(st, RF_EINPUT);
    assert_null(f);
    assert_string_equal(err.where, "spring.job:7");
    if (!strstr(err.message, want))
        fail_msg("\"%s\": message '%s' lacks '%s'", src, err.message, want);
}

static fvalue num(double v) { return (fvalue){FV_NUMBER, v, NULL}; }
static fvalue text(const char *s) { return (fvalue){FV_TEXT, 0, s}; }
static fvalue blank(void) { return (fvalue){FV_BLANK, 0, NULL}; }
static fvalue errv(const char *s) { return (fvalue){FV_ERROR, 0, s}; }

/* Evaluates src with refs; the formula's refs must number nrefs. */
static fvalue eval_ok(const char *src, const fvalue *refs, size_t nrefs)
{
    formula *f = parse_ok(src);
    assert_int_equal(formula_nrefs(f), nrefs);
    fvalue out = {0};
    char why[256] = "";
    int rc = formula_eval(f, refs, &out, why, sizeof why);
    if (rc != 0)
        fail_msg("\"%s\" failed: %s", src, why);
    formula_free(f);
    return out;
}

/* Evaluates src expecting the text want; checked before the formula,
 * which may own the text, is freed. */
static void eval_text(const char *src, const fvalue *refs, size_t nrefs,
                      const char *want)
{
    formula *f = parse_ok(src);
    assert_int_equal(formula_nrefs(f), nrefs);
    fvalue out = {0};
    char why[256] = "";
    if (formula_eval(f, refs, &out, why, sizeof why) != 0)
        fail_msg("\"%s\" failed: %s", src, why);
    assert_int_equal(out.type, FV_TEXT);
    assert_string_equal(out.text, want);
    formula_free(f);
}

static double eval_num(const char *src)
{
    fvalue v = eval_ok(src, NULL, 0);
    assert_int_equal(v.type, FV_NUMBER);
    return v.num;
}

/* Evaluates src expecting failure with exactly the reason want. */
static void eval_fails(const char *src, const fvalue *refs, size_t nrefs,
                       const char *want)
{
    formula *f = parse_ok(src);
    assert_int_equal(formula_nrefs(f), nrefs);
    fvalue out = {0};
    char why[256] = "";
    int rc = formula_eval(f, refs, &out, why, sizeof why);
    if (rc != -1)
        fail_msg("\"%s\" computed but should fail with '%s'", src, want);
    assert_string_equal(why, want);
    formula_free(f);
}

static char *sheet(const char *src, const char *const *cells)
{
    formula *f = parse_ok(src);
    char *s = formula_spreadsheet(f, cells);
    assert_non_null(s);
    formula_free(f);
    return s;
}

static void sheet_is(const char *src, const char *const *cells,
                     const char *want)
{
    char *s = sheet(src, cells);
    assert_string_equal(s, want);
    free(s);
}

/* ---- numbers and precedence -------------------------------------------- */

static void test_formula_reads_number_forms(void **state)
{
    (void)state;
    assert_true(eval_num("123") == 123);
    assert_true(eval_num("1.5") == 1.5);
    assert_true(eval_num(".5") == 0.5);
    assert_true(eval_num("5.") == 5);
    assert_true(eval_num("1e-3") == 0.001);
    assert_true(eval_num("2.5E+2") == 250);
    assert_true(eval_num("  2.385\t") == 2.385);
    /* subnormal literals are kept, not refused (IEEE 754 min subnormal) */
    assert_true(eval_num("4.9406564584124654e-324") > 0);
}

/* Operator precedence and associativity per the OpenFormula operator table
 * (OASIS OpenDocument 1.2 Part 2 = ISO/IEC 26300-2:2015): comparisons <
 * + - < * / < ^ < prefix + -, all left-associative. */
static void test_formula_follows_openformula_precedence(void **state)
{
    (void)state;
    assert_true(eval_num("1+2*3") == 7);
    assert_true(eval_num("(1+2)*3") == 9);
    assert_true(eval_num("2*3^2") == 18);
    assert_true(eval_num("2^3*2") == 16);
    assert_true(eval_num("1+2^2*3") == 13);
    assert_true(eval_num("-2^2") == 4);     /* prefix - binds tighter */
    assert_true(eval_num("-(2^2)") == -4);
    assert_true(eval_num("0-2^2") == -4);   /* binary - is below ^ */
    assert_true(eval_num("2^-2") == 0.25);
    assert_true(eval_num("2*-3") == -6);
    assert_true(eval_num("3 - -3") == 6);
    assert_true(eval_num("--3") == 3);
    assert_true(eval_num("+-+3") == -3);
    assert_true(eval_num("1+2=3") == 1);    /* comparison is lowest */
    assert_true(eval_num("2*3=6") == 1);
    assert_true(eval_num("1<2+0") == 1);
    assert_true(eval_num("-3^2 = 9") == 1);
}

static void test_formula_operators_are_left_associative(void **state)
{
    (void)state;
    assert_true(eval_num("2^3^2") == 64);
    assert_true(eval_num("(2^3)^2") == 64);
    assert_true(eval_num("2^(3^2)") == 512);
    assert_true(eval_num("10-4-3") == 3);
    assert_true(eval_num("100/10/5") == 2);
    assert_true(eval_num("3<2<1") == 1);    /* (3<2)=0, 0<1 */
    assert_true(eval_num("1=1=1") == 1);
}

static void test_formula_compares_numbers(void **state)
{
    (void)state;
    assert_true(eval_num("2.385 = 2.385") == 1);
    assert_true(eval_num("2.385 <> 2.385") == 0);
    assert_true(eval_num("1 < 2") == 1);
    assert_true(eval_num("2 < 1") == 0);
    assert_true(eval_num("2 <= 2") == 1);
    assert_true(eval_num("3 <= 2") == 0);
    assert_true(eval_num("2 > 1") == 1);
    assert_true(eval_num("1 > 1") == 0);
    assert_true(eval_num("1 >= 1") == 1);
    assert_true(eval_num("0 >= 1") == 0);
    /* Spreadsheets call 0.1+0.2 = 0.3 TRUE (common practice); rowfit too */
    assert_true(eval_num("0.1+0.2 = 0.3") == 1);
    assert_true(eval_num("0.1+0.2 <= 0.3") == 1);
    assert_true(eval_num("0.1+0.2 > 0.3") == 0);
    assert_true(eval_num("1 = 1.0000001") == 0);
}

static void test_formula_compares_text_without_case(void **state)
{
    (void)state;
    fvalue r[] = {text("Riverside")};
    assert_true(eval_ok("district = 'riverside'", r, 1).num == 1);
    assert_true(eval_ok("district <> 'RIVERSIDE'", r, 1).num == 0);
    assert_true(eval_ok("district = 'Hillcrest'", r, 1).num == 0);
    assert_true(eval_num("'abc' < 'ABD'") == 1);
    assert_true(eval_num("'b' > 'A'") == 1);
    assert_true(eval_num("'ab' < 'abc'") == 1);
    assert_true(eval_num("'It''s' = 'IT''S'") == 1);
}

/* Mixed types: numbers order before text (OpenFormula, from memory), so =
 * is FALSE, <> TRUE and a number is less than any text. */
static void test_formula_orders_numbers_before_text(void **state)
{
    (void)state;
    assert_true(eval_num("5 = '5'") == 0);
    assert_true(eval_num("5 <> '5'") == 1);
    assert_true(eval_num("5 < 'a'") == 1);
    assert_true(eval_num("'a' > 99") == 1);
    assert_true(eval_num("'' >= 1e300") == 1);
}

/* ---- functions ---------------------------------------------------------- */

static void test_formula_computes_logs_and_roots(void **state)
{
    (void)state;
    /* ln 10 = 2.302585092994045684..., log10 2 = 0.301029995663981195...,
     * e = 2.718281828459045235..., sqrt 2 = 1.414213562373095048...
     * (Abramowitz & Stegun, Handbook of Mathematical Functions, ch. 1
     * constants; from memory) */
    assert_close(eval_num("LN(10)"), 2.302585092994045684, 1e-15, 0);
    assert_close(eval_num("LOG10(2)"), 0.301029995663981195, 1e-15, 0);
    assert_close(eval_num("EXP(1)"), 2.718281828459045235, 1e-15, 0);
    assert_close(eval_num("SQRT(2)"), 1.414213562373095048, 1e-15, 0);
    assert_true(eval_num("LOG10(1000)") == 3);
    assert_true(eval_num("EXP(0)") == 1);
    assert_close(eval_num("LN(EXP(2.385))"), 2.385, 1e-15, 0);
    assert_true(eval_num("SQRT(0)") == 0);
    assert_true(eval_num("ABS(-2.385)") == 2.385);
    assert_true(eval_num("ABS(7)") == 7);
}

static void test_formula_computes_min_and_max(void **state)
{
    (void)state;
    assert_true(eval_num("MIN(3, 1, 2)") == 1);
    assert_true(eval_num("MAX(3, 1, 2)") == 3);
    assert_true(eval_num("MIN(2.385)") == 2.385);
    assert_true(eval_num("MAX(-1, -5)") == -1);
    assert_true(eval_num("MAX(1, 2) + MIN(10, 20) * 2") == 22);
}

/* ROUND rounds half away from zero (OpenFormula ROUND) on the value's
 * 15-digit decimal form, so results match what a spreadsheet shows. */
static void test_formula_rounds_like_a_spreadsheet(void **state)
{
    (void)state;
    assert_true(eval_num("ROUND(2.675, 2)") == 2.68);  /* double < 2.675 */
    assert_true(eval_num("ROUND(1.005, 2)") == 1.01);
    assert_true(eval_num("ROUND(0.285, 2)") == 0.29);
    assert_true(eval_num("ROUND(2.5)") == 3);
    assert_true(eval_num("ROUND(-2.5)") == -3);
    assert_true(eval_num("ROUND(-0.5, 0)") == -1);
    assert_true(eval_num("ROUND(0.49999)") == 0);
    assert_true(eval_num("ROUND(3.14159, 3)") == 3.142);
    assert_true(eval_num("ROUND(1.25, 1)") == 1.3);
    assert_true(eval_num("ROUND(1234.5678, -2)") == 1200);
    assert_true(eval_num("ROUND(5, -1)") == 10);
    assert_true(eval_num("ROUND(-15, -1)") == -20);
    assert_true(eval_num("ROUND(44, -2)") == 0);
    assert_true(eval_num("ROUND(1.23456, 2.9)") == 1.23);  /* digits truncate */
    assert_true(eval_num("ROUND(1.23456, -0.9)") == 1);
    assert_true(eval_num("ROUND(0.1+0.2, 20)") == 0.1 + 0.2);  /* no digit to cut */
    assert_true(eval_num("ROUND(1e300, -400)") == 0);
    assert_true(eval_num("ROUND(1e-300, 400)") == 1e-300);
    assert_true(eval_num("ROUND(1.5e-20, 20)") == 2e-20);
    assert_true(eval_num("ROUND(0, 3)") == 0);
    double z = eval_num("ROUND(-0.001)");
    assert_true(z == 0 && !signbit(z));  /* no "-0" in a workbook */
}

static void test_formula_computes_if(void **state)
{
    (void)state;
    assert_true(eval_num("IF(1, 2, 3)") == 2);
    assert_true(eval_num("IF(0, 2, 3)") == 3);
    assert_true(eval_num("IF(-0.5, 2, 3)") == 2);
    assert_true(eval_num("IF(0, 2)") == 0);
    assert_true(eval_num("IF(1, 2)") == 2);
    assert_true(eval_num("IF(2 > 1, IF(0, 5, 6), 7) * 10") == 60);
    eval_text("IF(2.385 > 2, 'big', 'small')", NULL, 0, "big");
    eval_text("IF(2.385 < 2, 'big', 'small')", NULL, 0, "small");
}

/* Serial days in the 1900 system; check values from libraries.md
 * ("2024-01-01 -> 45292", "1900-03-01 -> 61", "1900-02-28 -> 59") and the
 * phantom 1900-02-29 = 60 (libraries.md, "Spreadsheet file facts"). */
static void test_formula_reads_dates_from_serials(void **state)
{
    (void)state;
    assert_true(eval_num("YEAR(45292)") == 2024);
    assert_true(eval_num("MONTH(45292)") == 1);
    assert_true(eval_num("DAY(45292)") == 1);
    assert_true(eval_num("YEAR(45292.75)") == 2024);  /* time of day */
    assert_true(eval_num("DAY(45291.999)") == 31);
    assert_true(eval_num("MONTH(61)") == 3);
    assert_true(eval_num("DAY(61)") == 1);
    assert_true(eval_num("MONTH(60)") == 2);
    assert_true(eval_num("DAY(60)") == 29);
    assert_true(eval_num("DAY(59)") == 28);
    assert_true(eval_num("YEAR(1)") == 1900);
}

static void test_formula_function_names_ignore_case(void **state)
{
    (void)state;
    assert_true(eval_num("round(2.5)") == 3);
    assert_true(eval_num("Sqrt(16)") == 4);
    assert_true(eval_num("mAx(1, 2)") == 2);
    assert_true(eval_num("if(1, 2, 3)") == 2);
}

/* ---- references --------------------------------------------------------- */

static void test_formula_lists_references_once_in_order(void **state)
{
    (void)state;
    formula *f = parse_ok("price / area + \"price\" * 2 - area + lot_size.m2");
    assert_int_equal(formula_nrefs(f), 3);
    assert_string_equal(formula_ref(f, 0), "price");
    assert_string_equal(formula_ref(f, 1), "area");
    assert_string_equal(formula_ref(f, 2), "lot_size.m2");
    fvalue r[] = {num(300000), num(150), num(0.5)};
    fvalue out;
    char why[64];
    assert_int_equal(formula_eval(f, r, &out, why, sizeof why), 0);
    assert_true(out.num == 300000.0 / 150 + 600000 - 150 + 0.5);
    formula_free(f);
}

static void test_formula_reads_quoted_names(void **state)
{
    (void)state;
    formula *f = parse_ok("\"living area\" * 2 + \"say \"\"hi\"\"\" + _x1");
    assert_int_equal(formula_nrefs(f), 3);
    assert_string_equal(formula_ref(f, 0), "living area");
    assert_string_equal(formula_ref(f, 1), "say \"hi\"");
    assert_string_equal(formula_ref(f, 2), "_x1");
    formula_free(f);
    /* names are matched exactly; the table decides about case */
    f = parse_ok("Area + area");
    assert_int_equal(formula_nrefs(f), 2);
    formula_free(f);
    /* a function name without parentheses is a column */
    f = parse_ok("year + 1");
    assert_int_equal(formula_nrefs(f), 1);
    assert_string_equal(formula_ref(f, 0), "year");
    formula_free(f);
    /* UTF-8 letters may start and continue a bare name */
    f = parse_ok("größe * 2");
    assert_string_equal(formula_ref(f, 0), "größe");
    formula_free(f);
}

static void test_formula_handles_many_references(void **state)
{
    (void)state;
    char src[4096] = "";
    fvalue r[100];
    double want = 0;
    for (int i = 0; i < 100; i++) {
        char part[32];
        snprintf(part, sizeof part, "%sc%d + c%d", i ? " + " : "", i, i);
        strcat(src, part);
        r[i] = num(i * 1.5);
        want += 2 * i * 1.5;
    }
    formula *f = parse_ok(src);
    assert_int_equal(formula_nrefs(f), 100);
    assert_string_equal(formula_ref(f, 57), "c57");
    fvalue out;
    assert_int_equal(formula_eval(f, r, &out, NULL, 0), 0);
    assert_true(out.num == want);
    formula_free(f);
}

static void test_formula_returns_text_values(void **state)
{
    (void)state;
    const char *mine = "Riverside";
    fvalue r[] = {text(mine)};
    fvalue v = eval_ok("district", r, 1);
    assert_int_equal(v.type, FV_TEXT);
    assert_ptr_equal(v.text, mine);  /* borrowed from the caller */
    eval_text("'It''s'", NULL, 0, "It's");
}

/* ---- lazy IF and unusable values --------------------------------------- */

static void test_formula_if_evaluates_only_the_chosen_branch(void **state)
{
    (void)state;
    fvalue r[] = {num(2), blank()};
    assert_true(eval_ok("IF(a > 0, a, b)", r, 2).num == 2);
    fvalue r2[] = {num(-1)};
    assert_true(eval_ok("IF(a > 0, LN(a), 5)", r2, 1).num == 5);
    assert_true(eval_ok("IF(a < 0, 5, 1/0)", r2, 1).num == 5);
    assert_true(eval_num("IF(0, 1/0)") == 0);
    fvalue r3[] = {num(0), errv("#N/A")};
    assert_true(eval_ok("IF(a, b, 7)", r3, 2).num == 7);
    /* the taken branch still fails */
    fvalue r4[] = {num(-1), blank()};
    eval_fails("IF(a > 0, a, b)", r4, 2, "b is blank");
}

static void test_formula_refuses_unusable_references(void **state)
{
    (void)state;
    fvalue r1[] = {blank()};
    eval_fails("bathrooms * 2", r1, 1, "bathrooms is blank");
    eval_fails("IF(bathrooms, 1, 2)", r1, 1, "bathrooms is blank");
    fvalue r2[] = {errv("#N/A")};
    eval_fails("age + 1", r2, 1, "age is #N/A");
    fvalue r3[] = {text("Riverside")};
    eval_fails("district + 1", r3, 1, "district is 'Riverside', not a number");
    eval_fails("-district", r3, 1, "district is 'Riverside', not a number");
    eval_fails("MIN(1, district)", r3, 1,
               "district is 'Riverside', not a number");
    eval_fails("IF(district, 1, 2)", r3, 1,
               "district is 'Riverside', not a number");
    eval_fails("'abc' * 2", NULL, 0, "'abc' is text, not a number");
    eval_fails("LN(IF(1, 'x', 2))", NULL, 0, "'x' is text, not a number");
    fvalue r4[] = {num(INFINITY)};
    eval_fails("x + 1", r4, 1, "x is not a finite number");
    fvalue r5[] = {text("a very long piece of text that goes on and on and "
                        "on well past sixty bytes")};
    eval_fails("t + 1", r5, 1, "t is 'a very long piece of text that goes on "
               "and on and on well pa...', not a number");
}

static void test_formula_reports_domain_errors(void **state)
{
    (void)state;
    eval_fails("1 / 0", NULL, 0, "division by zero");
    eval_fails("1 / (2 - 2)", NULL, 0, "division by zero");
    eval_fails("LN(-3)", NULL, 0, "LN of -3");
    eval_fails("LN(0)", NULL, 0, "LN of 0");
    eval_fails("LOG10(-0.25)", NULL, 0, "LOG10 of -0.25");
    eval_fails("SQRT(-4)", NULL, 0, "SQRT of -4");
    eval_fails("EXP(1000)", NULL, 0, "result is too large");
    eval_fails("1e308 * 10", NULL, 0, "result is too large");
    eval_fails("10 ^ 400", NULL, 0, "result is too large");
    eval_fails("0 ^ -2", NULL, 0, "division by zero (0 ^ -2)");
    eval_fails("0 ^ 0", NULL, 0, "0 ^ 0 is undefined");
    eval_fails("(-8) ^ (1/3)", NULL, 0,
               "(-8) ^ 0.333333333333333 has no real value");
    assert_true(eval_num("(-2) ^ 3") == -8);
    eval_fails("YEAR(0)", NULL, 0,
               "YEAR of 0: not a date (serial days run from 1 to 2958465)");
    eval_fails("MONTH(3000000)", NULL, 0,
               "MONTH of 3000000: not a date (serial days run from 1 to "
               "2958465)");
    eval_fails("DAY(-5)", NULL, 0,
               "DAY of -5: not a date (serial days run from 1 to 2958465)");
}

static void test_formula_eval_accepts_small_or_no_reason_buffer(void **state)
{
    (void)state;
    formula *f = parse_ok("LN(-3)");
    fvalue out;
    char why[4];
    assert_int_equal(formula_eval(f, NULL, &out, why, sizeof why), -1);
    assert_string_equal(why, "LN ");
    assert_int_equal(formula_eval(f, NULL, &out, NULL, 0), -1);
    formula_free(f);
}

/* ---- parse errors ------------------------------------------------------- */

static void test_formula_rejects_bad_characters_and_tokens(void **state)
{
    (void)state;
    parse_fails("", "empty formula");
    parse_fails("  \t ", "empty formula");
    parse_fails("a $ b", "unexpected character '$' at column 3");
    parse_fails("größe $", "unexpected character '$' at column 7");
    parse_fails("a \x01", "unexpected control character (byte 0x01) at "
                "column 3");
    parse_fails("a != b", "unexpected '!=' at column 3 (write <> for");
    parse_fails("a == b", "expected a value at column 4, found '=' (write a "
                "single =");
    parse_fails("'abc", "text starting at column 1 has no closing quote");
    parse_fails("1 + \"living area", "name starting at column 5 has no "
                "closing double quote");
    parse_fails("\"\" + 1", "empty column name \"\" at column 1");
    parse_fails("1e999", "number 1e999 at column 1 is too large");
    char longnum[600];
    memset(longnum, '1', sizeof longnum - 1);
    longnum[sizeof longnum - 1] = '\0';
    parse_fails(longnum, "at column 1 is too long");
}

static void test_formula_rejects_bad_structure(void **state)
{
    (void)state;
    parse_fails("(a + b", "unbalanced parenthesis: '(' at column 1 is never "
                "closed");
    parse_fails("a + b)", "unbalanced parenthesis: ')' at column 6 has no "
                "matching '('");
    parse_fails("ROUND(a", "unbalanced parenthesis: '(' at column 6 is never "
                "closed");
    parse_fails("1 +", "expected a value at column 4, found the end of the "
                "formula");
    parse_fails("* 2", "expected a value at column 1, found '*'");
    parse_fails("()", "empty parentheses at column 1");
    parse_fails("a b", "unexpected name 'b' at column 3 (missing operator?)");
    parse_fails("2 3", "unexpected number 3 at column 3");
    parse_fails("(a 'x')", "unexpected text 'x' at column 4 (missing "
                "operator?)");
    parse_fails("\"living area\"(2)", "unexpected '(' at column 14");
    parse_fails("ROUND(a b)", "unexpected name 'b' at column 9 in the "
                "arguments of ROUND");
    parse_fails("a, b", "unexpected ',' at column 2");
}

static void test_formula_rejects_wrong_arguments(void **state)
{
    (void)state;
    parse_fails("ROUND(a,)", "missing argument to ROUND at column 9");
    parse_fails("ROUND(,2)", "missing argument to ROUND at column 7");
    parse_fails("ROUND(a, 1, 2)", "ROUND takes 1 or 2 arguments, got 3");
    parse_fails("LN()", "LN takes 1 argument, got 0");
    parse_fails("EXP(1, 2)", "EXP takes 1 argument, got 2");
    parse_fails("MAX()", "MAX takes 1 or more arguments, got 0");
    parse_fails("IF(a)", "IF takes 2 or 3 arguments, got 1");
    parse_fails("IF(a, 1, 2, 3)", "IF takes 2 or 3 arguments, got 4");
    parse_fails("YEAR(1, 2)", "YEAR takes 1 argument, got 2");
}

static void test_formula_suggests_known_functions(void **state)
{
    (void)state;
    parse_fails("SQR(4)", "unknown function 'SQR' at column 1 (did you mean "
                "SQRT?)");
    parse_fails("1 + log(4)", "unknown function 'log' at column 5 (did you "
                "mean LOG10?)");
    parse_fails("ROUNDD(4)", "(did you mean ROUND?)");
    parse_fails("AVERAGE(a)", "unknown function 'AVERAGE' at column 1 (the "
                "functions are LN, LOG10");
}

static void test_formula_enforces_limits(void **state)
{
    (void)state;
    char src[FORMULA_TEXT_MAX + 2];
    /* nesting: FORMULA_DEPTH_MAX - 1 parentheses parse, more do not */
    int n = FORMULA_DEPTH_MAX - 1;
    memset(src, '(', (size_t)n);
    src[n] = '1';
    memset(src + n + 1, ')', (size_t)n);
    src[2 * n + 1] = '\0';
    formula_free(parse_ok(src));
    n = FORMULA_DEPTH_MAX;
    memset(src, '(', (size_t)n);
    src[n] = '1';
    memset(src + n + 1, ')', (size_t)n);
    src[2 * n + 1] = '\0';
    parse_fails(src, "formula is nested too deeply");
    memset(src, '-', 100);
    strcpy(src + 100, "1");
    parse_fails(src, "formula is nested too deeply");

    /* length */
    memset(src, ' ', FORMULA_TEXT_MAX);
    src[0] = '1';
    src[FORMULA_TEXT_MAX] = '\0';
    formula_free(parse_ok(src));
    src[FORMULA_TEXT_MAX] = ' ';
    src[FORMULA_TEXT_MAX + 1] = '\0';
    parse_fails(src, "formula is too long (8193 bytes; at most 8192)");

    /* values held at once */
    char *s = src;
    s += sprintf(s, "MAX(1");
    for (int i = 1; i < FORMULA_STACK_MAX; i++)
        s += sprintf(s, ",%d", i % 10);
    strcpy(s, ")");
    formula *f = parse_ok(src);
    fvalue out;
    assert_int_equal(formula_eval(f, NULL, &out, NULL, 0), 0);
    assert_true(out.num == 9);
    formula_free(f);
    strcpy(s, ",2)");
    parse_fails(src, "formula is too complex: it needs more than 256 values");
}

/* ---- printing ----------------------------------------------------------- */

static void test_formula_prints_spreadsheet_formula(void **state)
{
    (void)state;
    const char *cells[] = {"C2", "D2", "AB17"};
    sheet_is("price / \"living area\"", cells, "=C2/D2");
    sheet_is("round(ln(price), 2) + price", cells, "=ROUND(LN(C2),2)+C2");
    sheet_is("a <> b", cells, "=C2<>D2");
    sheet_is("a>=b", cells, "=C2>=D2");
    sheet_is("a <= b = (c < 1)", cells, "=C2<=D2=(AB17<1)");
    sheet_is("-2^2", cells, "=-2^2");
    sheet_is("2^3^2", cells, "=2^3^2");
    sheet_is("((a+b))*c", cells, "=((C2+D2))*AB17");
    sheet_is("max(a, b, c) - +a", cells, "=MAX(C2,D2,AB17)-+C2");
    sheet_is("district = 'Riverside'", cells, "=C2=\"Riverside\"");
    sheet_is("'say \"hi\", it''s'", cells, "=\"say \"\"hi\"\", it's\"");
    sheet_is("IF(year(d) >= 2020, 'new', 'old')", cells,
             "=IF(YEAR(C2)>=2020,\"new\",\"old\")");
}

/* ROUND's digits and IF's else are optional in OpenFormula but a workbook
 * program may insist on them, so they are printed. */
static void test_formula_prints_optional_arguments(void **state)
{
    (void)state;
    const char *cells[] = {"B5"};
    sheet_is("round(x)", cells, "=ROUND(B5,0)");
    sheet_is("IF(x > 1, 'big')", cells, "=IF(B5>1,\"big\",0)");
    sheet_is("IF(x, IF(x, 1), 2)", cells, "=IF(B5,IF(B5,1,0),2)");
}

static void test_formula_prints_numbers_shortest(void **state)
{
    (void)state;
    sheet_is("0.1 + .5 + 1.50 + 1e-3 + 2.385", NULL,
             "=0.1+0.5+1.5+0.001+2.385");
    sheet_is("123456789 + 1e20 + 1e-7 + 2020 + 0.00001234", NULL,
             "=123456789+1E+20+1E-07+2020+0.00001234");
    sheet_is("99999999999999.9 + 1e15 + 123e13", NULL,
             "=99999999999999.9+1E+15+1.23E+15");
}

/* Printing then parsing again gives the very same doubles, shortest form
 * or not (round-trip at up to 17 digits, IEEE 754-2008 section 5.12.2). */
static void test_formula_printed_numbers_round_trip(void **state)
{
    (void)state;
    const char *lits[] = {"0.1", "0.3333333333333333", "2.675",
                          "4.9406564584124654e-324",
                          "1.7976931348623157e308", "9007199254740993",
                          "123456.789e-10", "0.30000000000000004"};
    for (size_t i = 0; i < sizeof lits / sizeof *lits; i++) {
        double want = eval_num(lits[i]);
        char *s = sheet(lits[i], NULL);
        assert_true(s[0] == '=');
        double back = eval_num(s + 1);
        if (back != want)
            fail_msg("%s printed as %s reads back as %.17g", lits[i], s,
                     back);
        free(s);
    }
}

static void test_formula_parses_numbers_in_any_locale(void **state)
{
    (void)state;
    /* A locale with a decimal comma must not change formula numbers. */
    if (!setlocale(LC_NUMERIC, "de_DE.UTF-8")
        && !setlocale(LC_NUMERIC, "fr_FR.UTF-8")) {
        skip();
        return;
    }
    double v = eval_num("2.385 + 0.5");
    char *s = sheet("2.385", NULL);
    setlocale(LC_NUMERIC, "C");
    assert_true(v == 2.885);
    assert_string_equal(s, "=2.385");
    free(s);
}

static void test_formula_free_accepts_null(void **state)
{
    (void)state;
    formula_free(NULL);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_formula_reads_number_forms),
        cmocka_unit_test(test_formula_follows_openformula_precedence),
        cmocka_unit_test(test_formula_operators_are_left_associative),
        cmocka_unit_test(test_formula_compares_numbers),
        cmocka_unit_test(test_formula_compares_text_without_case),
        cmocka_unit_test(test_formula_orders_numbers_before_text),
        cmocka_unit_test(test_formula_computes_logs_and_roots),
        cmocka_unit_test(test_formula_computes_min_and_max),
        cmocka_unit_test(test_formula_rounds_like_a_spreadsheet),
        cmocka_unit_test(test_formula_computes_if),
        cmocka_unit_test(test_formula_reads_dates_from_serials),
        cmocka_unit_test(test_formula_function_names_ignore_case),
        cmocka_unit_test(test_formula_lists_references_once_in_order),
        cmocka_unit_test(test_formula_reads_quoted_names),
        cmocka_unit_test(test_formula_handles_many_references),
        cmocka_unit_test(test_formula_returns_text_values),
        cmocka_unit_test(test_formula_if_evaluates_only_the_chosen_branch),
        cmocka_unit_test(test_formula_refuses_unusable_references),
        cmocka_unit_test(test_formula_reports_domain_errors),
        cmocka_unit_test(test_formula_eval_accepts_small_or_no_reason_buffer),
        cmocka_unit_test(test_formula_rejects_bad_characters_and_tokens),
        cmocka_unit_test(test_formula_rejects_bad_structure),
        cmocka_unit_test(test_formula_rejects_wrong_arguments),
        cmocka_unit_test(test_formula_suggests_known_functions),
        cmocka_unit_test(test_formula_enforces_limits),
        cmocka_unit_test(test_formula_prints_spreadsheet_formula),
        cmocka_unit_test(test_formula_prints_optional_arguments),
        cmocka_unit_test(test_formula_prints_numbers_shortest),
        cmocka_unit_test(test_formula_printed_numbers_round_trip),
        cmocka_unit_test(test_formula_parses_numbers_in_any_locale),
        cmocka_unit_test(test_formula_free_accepts_null),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
