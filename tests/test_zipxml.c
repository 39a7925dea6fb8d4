/*
 * test_zipxml.c: streaming zip members through expat and the safety
 * limits: text in pieces, stored and deflated members, a handler's error
 * and early stop, a missing part, malformed XML with its line, DOCTYPE
 * and entity expansion refused, declared sizes over the limits, a lying
 * size, an inflate ratio past the limit, a refused compression method, a
 * truncated package and a file that is not a zip. Packages are written per
 * test into a fresh temporary folder (tests/ziptest.h).
 */
#include "testutil.h"

#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "../io/zipxml.h"
#include "ziptest.h"

typedef struct fixture {
    char dir[64];
    char path[128];
    rf_error err;
    zipxml *z;
    /* what the handlers saw */
    int elements;
    char text[256];
    size_t text_len;
    int text_calls;
    int fail_at;      /* element count at which start calls zipxml_fail */
    int stop_at;      /* ... or zipxml_stop */
} fixture;

static int setup(void **state)
{
    fixture *f = calloc(1, sizeof *f);
    if (f == NULL)
        return -1;
    snprintf(f->dir, sizeof f->dir, "/tmp/rowfit-zipxml-XXXXXX");
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
    zipxml_close(f->z);
    unlink(f->path);
    rmdir(f->dir);
    free(f);
    return 0;
}

static void XMLCALL on_start(void *ud, const XML_Char *n, const XML_Char **a)
{
    fixture *f = ud;
    (void)n;
    (void)a;
    f->elements++;
    if (f->fail_at && f->elements == f->fail_at)
        zipxml_fail(f->z, RF_EINPUT, NULL, "element %d is wrong",
                    f->elements);
    if (f->stop_at && f->elements == f->stop_at)
        zipxml_stop(f->z);
}

static void XMLCALL on_end(void *ud, const XML_Char *n)
{
    (void)ud;
    (void)n;
}

static void XMLCALL on_text(void *ud, const XML_Char *s, int len)
{
    fixture *f = ud;
    f->text_calls++;
    for (int i = 0; i < len && f->text_len + 1 < sizeof f->text; i++)
        f->text[f->text_len++] = s[i];
    f->text[f->text_len] = '\0';
}

static rf_status parse(fixture *f, const char *member)
{
    zipxml_handlers h = {on_start, on_end, on_text};
    memset(&f->err, 0, sizeof f->err);
    return zipxml_parse(f->z, member, &h, f, &f->err);
}

static rf_status open_path(fixture *f)
{
    memset(&f->err, 0, sizeof f->err);
    return zipxml_open(f->path, "book.xlsx", &f->z, &f->err);
}

/* A package with one member holding xml. */
static void one_member(fixture *f, const char *xml)
{
    zipFile zf = zt_create(f->path);
    zt_add_text(zf, "xl/part.xml", xml);
    zt_close(zf);
    assert_int_equal(open_path(f), RF_OK);
}

static void test_zipxml_streams_elements_and_text(void **state)
{
    fixture *f = *state;
    one_member(f, "<?xml version=\"1.0\"?><a xmlns=\"urn:x\"><b>he&amp;llo"
                  "</b><c/></a>");
    assert_true(zipxml_has(f->z, "xl/part.xml"));
    assert_false(zipxml_has(f->z, "xl/other.xml"));
    assert_int_equal(parse(f, "xl/part.xml"), RF_OK);
    assert_int_equal(f->elements, 3);
    assert_string_equal(f->text, "he&llo");
}

static void XMLCALL ns_start(void *ud, const XML_Char *n, const XML_Char **a)
{
    fixture *f = ud;
    (void)a;
    if (f->elements++ == 0)
        snprintf(f->text, sizeof f->text, "%s", n);
}

static void test_zipxml_names_carry_namespace_and_separator(void **state)
{
    fixture *f = *state;
    one_member(f, "<x:a xmlns:x=\"urn:sheet\"/>");
    zipxml_handlers h = {ns_start, on_end, NULL};
    assert_int_equal(zipxml_parse(f->z, "xl/part.xml", &h, f, &f->err),
                     RF_OK);
    assert_string_equal(f->text, "urn:sheet|a");
}

/* 300 KB of text: more than one inflate chunk, so text arrives in pieces
 * and every piece must be delivered. */
static void test_zipxml_reads_a_part_larger_than_a_chunk(void **state)
{
    fixture *f = *state;
    size_t n = 300000;
    char *xml = malloc(n + 16);
    assert_non_null(xml);
    strcpy(xml, "<a>");
    memset(xml + 3, 'x', n);
    strcpy(xml + 3 + n, "</a>");
    zipFile zf = zt_create(f->path);
    zt_add(zf, "big.xml", xml, strlen(xml), 0);  /* stored, method 0 */
    zt_close(zf);
    free(xml);
    assert_int_equal(open_path(f), RF_OK);
    assert_int_equal(parse(f, "big.xml"), RF_OK);
    assert_true(f->text_calls > 1);
    assert_int_equal(f->text_len, sizeof f->text - 1);  /* kept the start */
}

static void test_zipxml_handler_failure_stops_with_its_message(void **state)
{
    fixture *f = *state;
    one_member(f, "<a>\n<b/>\n<c/>\n<d/></a>");
    f->fail_at = 3;
    assert_int_equal(parse(f, "xl/part.xml"), RF_EINPUT);
    assert_int_equal(f->elements, 3);
    assert_string_equal(f->err.message, "element 3 is wrong");
    assert_string_equal(f->err.where, "book.xlsx: part xl/part.xml:3");
}

static void test_zipxml_stop_ends_the_part_successfully(void **state)
{
    fixture *f = *state;
    one_member(f, "<a><b/><c/><d/></a>");
    f->stop_at = 2;
    assert_int_equal(parse(f, "xl/part.xml"), RF_OK);
    assert_int_equal(f->elements, 2);
    /* The next part starts afresh. */
    f->stop_at = 0;
    f->elements = 0;
    assert_int_equal(parse(f, "xl/part.xml"), RF_OK);
    assert_int_equal(f->elements, 4);
}

static void test_zipxml_missing_part_is_named(void **state)
{
    fixture *f = *state;
    one_member(f, "<a/>");
    assert_int_equal(parse(f, "xl/workbook.xml"), RF_EINPUT);
    assert_string_equal(f->err.where, "book.xlsx: part xl/workbook.xml");
    assert_non_null(strstr(f->err.message, "missing"));
}

static void test_zipxml_malformed_xml_names_its_line(void **state)
{
    fixture *f = *state;
    one_member(f, "<a>\n<b>\n</a>");
    assert_int_equal(parse(f, "xl/part.xml"), RF_EINPUT);
    assert_string_equal(f->err.where, "book.xlsx: part xl/part.xml:3");
    assert_non_null(strstr(f->err.message, "malformed XML"));
}

static void test_zipxml_refuses_doctype(void **state)
{
    fixture *f = *state;
    one_member(f, "<?xml version=\"1.0\"?>\n<!DOCTYPE a [<!ENTITY e \"x\">]>"
                  "\n<a>&e;</a>");
    assert_int_equal(parse(f, "xl/part.xml"), RF_EINPUT);
    assert_non_null(strstr(f->err.message, "DOCTYPE"));
    assert_int_equal(f->elements, 0);
}

/* The classic entity expansion ("billion laughs"; expat's documentation of
 * XML_SetBillionLaughsAttackProtectionMaximumAmplification): refused at
 * the DOCTYPE, before a single entity is declared. */
static void test_zipxml_refuses_entity_expansion(void **state)
{
    fixture *f = *state;
    char xml[4096];
    int n = snprintf(xml, sizeof xml, "<?xml version=\"1.0\"?>\n<!DOCTYPE "
                     "lolz [\n<!ENTITY lol \"lol\">\n");
    for (int i = 1; i < 10; i++) {
        char prev[16];
        snprintf(prev, sizeof prev, i == 1 ? "lol" : "lol%d", i - 1);
        n += snprintf(xml + n, sizeof xml - (size_t)n, "<!ENTITY lol%d \"", i);
        for (int k = 0; k < 10; k++)
            n += snprintf(xml + n, sizeof xml - (size_t)n, "&%s;", prev);
        n += snprintf(xml + n, sizeof xml - (size_t)n, "\">\n");
    }
    snprintf(xml + n, sizeof xml - (size_t)n, "]>\n<lolz>&lol9;</lolz>");
    one_member(f, xml);
    assert_int_equal(parse(f, "xl/part.xml"), RF_EINPUT);
    assert_non_null(strstr(f->err.message, "DOCTYPE"));
    assert_int_equal(f->text_len, 0);
}

static void test_zipxml_refuses_declared_part_size_over_limit(void **state)
{
    fixture *f = *state;
    size_t clen;
    unsigned char *c = zt_deflate("<a/>", 4, &clen);
    zipFile zf = zt_create(f->path);
    zt_add_raw(zf, "xl/bomb.xml", c, clen, Z_DEFLATED, (uint64_t)3 << 30,
               0);
    zt_close(zf);
    free(c);
    assert_int_equal(open_path(f), RF_EINPUT);
    assert_null(f->z);
    assert_string_equal(f->err.where, "book.xlsx: part xl/bomb.xml");
    assert_non_null(strstr(f->err.message, "zip bomb"));
}

static void test_zipxml_refuses_declared_total_over_limit(void **state)
{
    fixture *f = *state;
    size_t clen;
    unsigned char *c = zt_deflate("<a/>", 4, &clen);
    zipFile zf = zt_create(f->path);
    char name[32];
    for (int i = 0; i < 3; i++) {  /* 3 x 1.5 GiB: each under the part cap */
        snprintf(name, sizeof name, "xl/part%d.xml", i);
        zt_add_raw(zf, name, c, clen, Z_DEFLATED, (uint64_t)3 << 29, 0);
    }
    zt_close(zf);
    free(c);
    assert_int_equal(open_path(f), RF_EINPUT);
    assert_string_equal(f->err.where, "book.xlsx");
    assert_non_null(strstr(f->err.message, "in all"));
}

/* A header that declares 1000 bytes for 200 KB of XML: minizip stops at
 * the declared size and the CRC fails (libraries.md A4). */
static void test_zipxml_lying_size_is_corrupt_part(void **state)
{
    fixture *f = *state;
    size_t n = 200000;
    char *xml = malloc(n + 16);
    assert_non_null(xml);
    strcpy(xml, "<a>");
    memset(xml + 3, 'x', n);
    strcpy(xml + 3 + n, "</a>");
    size_t clen;
    unsigned char *c = zt_deflate(xml, strlen(xml), &clen);
    uLong crc = crc32(0L, (const Bytef *)xml, (uInt)strlen(xml));
    zipFile zf = zt_create(f->path);
    zt_add_raw(zf, "xl/liar.xml", c, clen, Z_DEFLATED, 1000, crc);
    zt_close(zf);
    free(c);
    free(xml);
    assert_int_equal(open_path(f), RF_OK);
    assert_int_equal(parse(f, "xl/liar.xml"), RF_EINPUT);
    assert_string_equal(f->err.where, "book.xlsx: part xl/liar.xml");
    assert_non_null(strstr(f->err.message, "corrupt or truncated part"));
}

/* 8 MiB of one byte deflates about 1000:1; its true declared size is
 * refused by the ratio limit before inflating. */
static void test_zipxml_refuses_inflate_ratio_over_limit(void **state)
{
    fixture *f = *state;
    size_t n = (size_t)8 << 20;
    char *xml = malloc(n);
    assert_non_null(xml);
    memset(xml, ' ', n);
    memcpy(xml, "<a>", 3);
    memcpy(xml + n - 4, "</a>", 4);
    zipFile zf = zt_create(f->path);
    zt_add(zf, "xl/dense.xml", xml, n, Z_DEFLATED);
    zt_close(zf);
    free(xml);
    assert_int_equal(open_path(f), RF_OK);
    assert_int_equal(parse(f, "xl/dense.xml"), RF_EINPUT);
    assert_non_null(strstr(f->err.message, "ratio"));
    assert_int_equal(f->elements, 0);
}

static void test_zipxml_refuses_other_compression_methods(void **state)
{
    fixture *f = *state;
    zipFile zf = zt_create(f->path);
    zt_add(zf, "xl/bz.xml", "<a/>", 4, 0);
    zt_close(zf);
    /* minizip writes only methods 0 and 8: patch the method fields of the
     * local and central headers to 12, bzip2 (PKWARE APPNOTE 4.4.5). */
    FILE *fp = fopen(f->path, "r+b");
    assert_non_null(fp);
    unsigned char buf[1024];
    size_t n = fread(buf, 1, sizeof buf, fp);
    int patched = 0;
    for (size_t i = 0; i + 12 < n; i++) {
        if (buf[i] == 'P' && buf[i + 1] == 'K' && buf[i + 2] == 3 &&
            buf[i + 3] == 4) {
            buf[i + 8] = 12;
            patched++;
        } else if (buf[i] == 'P' && buf[i + 1] == 'K' && buf[i + 2] == 1 &&
                   buf[i + 3] == 2) {
            buf[i + 10] = 12;
            patched++;
        }
    }
    assert_int_equal(patched, 2);
    rewind(fp);
    assert_int_equal(fwrite(buf, 1, n, fp), n);
    fclose(fp);
    assert_int_equal(open_path(f), RF_OK);
    assert_int_equal(parse(f, "xl/bz.xml"), RF_EINPUT);
    assert_non_null(strstr(f->err.message, "method 12"));
}

static void test_zipxml_corrupt_deflate_data_is_corrupt_part(void **state)
{
    fixture *f = *state;
    static const unsigned char junk[] = {0xff, 0xff, 0xff, 0xff, 0x00,
                                         0x13, 0x37, 0x42};
    zipFile zf = zt_create(f->path);
    zt_add_raw(zf, "xl/junk.xml", junk, sizeof junk, Z_DEFLATED, 100, 0);
    zt_close(zf);
    assert_int_equal(open_path(f), RF_OK);
    assert_int_equal(parse(f, "xl/junk.xml"), RF_EINPUT);
    assert_non_null(strstr(f->err.message, "corrupt or truncated part"));
}

static void test_zipxml_truncated_package_is_refused(void **state)
{
    fixture *f = *state;
    one_member(f, "<a>some text that takes a few bytes</a>");
    zipxml_close(f->z);
    f->z = NULL;
    FILE *fp = fopen(f->path, "rb");
    assert_non_null(fp);
    char buf[4096];
    size_t n = fread(buf, 1, sizeof buf, fp);
    fclose(fp);
    assert_true(n > 40);
    fp = fopen(f->path, "wb");
    assert_non_null(fp);
    assert_int_equal(fwrite(buf, 1, n - 30, fp), n - 30);
    fclose(fp);
    assert_int_equal(open_path(f), RF_EINPUT);
    assert_string_equal(f->err.where, "book.xlsx");
    assert_non_null(strstr(f->err.message, "truncated or corrupt"));
}

static void test_zipxml_not_a_zip_is_refused(void **state)
{
    fixture *f = *state;
    FILE *fp = fopen(f->path, "wb");
    assert_non_null(fp);
    fputs("id,price\n1,2\n", fp);
    fclose(fp);
    assert_int_equal(open_path(f), RF_EINPUT);
    assert_null(f->z);
    assert_non_null(strstr(f->err.message, "not a zip"));
}

static void test_zipxml_missing_file_is_system_error(void **state)
{
    fixture *f = *state;
    assert_int_equal(open_path(f), RF_ESYSTEM);
    assert_string_equal(f->err.where, "book.xlsx");
}

int main(void)
{
    const struct CMUnitTest tests[] = {
#define T(name) cmocka_unit_test_setup_teardown(name, setup, teardown)
        T(test_zipxml_streams_elements_and_text),
        T(test_zipxml_names_carry_namespace_and_separator),
        T(test_zipxml_reads_a_part_larger_than_a_chunk),
        T(test_zipxml_handler_failure_stops_with_its_message),
        T(test_zipxml_stop_ends_the_part_successfully),
        T(test_zipxml_missing_part_is_named),
        T(test_zipxml_malformed_xml_names_its_line),
        T(test_zipxml_refuses_doctype),
        T(test_zipxml_refuses_entity_expansion),
        T(test_zipxml_refuses_declared_part_size_over_limit),
        T(test_zipxml_refuses_declared_total_over_limit),
        T(test_zipxml_lying_size_is_corrupt_part),
        T(test_zipxml_refuses_inflate_ratio_over_limit),
        T(test_zipxml_refuses_other_compression_methods),
        T(test_zipxml_corrupt_deflate_data_is_corrupt_part),
        T(test_zipxml_truncated_package_is_refused),
        T(test_zipxml_not_a_zip_is_refused),
        T(test_zipxml_missing_file_is_system_error),
#undef T
    };
    return cmocka_run_group_tests_name("zipxml", tests, NULL, NULL);
}
