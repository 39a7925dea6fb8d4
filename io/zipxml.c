/*
 * zipxml.c: zip member -> expat, in chunks, with the safety limits (see
 * zipxml.h). minizip inflates straight into expat's own buffer
 * (XML_GetBuffer), so a part is never held whole. Not an XML tree builder
 * and not a zip writer.
 *
 * Why each limit exists (a file can come from anywhere):
 * - minizip stops a member at the size its central directory declares and
 *   then reports a CRC error (libraries.md A4), so the declared sizes bound
 *   the work; they are checked at open, before anything is inflated.
 * - A member that declares a small size but inflates to more is cut at the
 *   declared size and fails its CRC: "corrupt or truncated part".
 */
/* expat declares its amplification settings only for builds with DTD
 * support, which Debian's is (XML_GetFeatureList lists XML_DTD). */
#define XML_DTD 1
#include "zipxml.h"

#include <errno.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <minizip/unzip.h>

/* A 1,000,000-row sheet of ten numeric columns is about 330 MB of XML
 * (measured on a generated bench sheet); 2 GiB per part leaves room for wide sheets
 * and long strings while refusing a member that declares more. */
#define ZIPXML_PART_MAX ((uint64_t)2 << 30)
/* Sum of all declared sizes: a workbook is one big sheet plus small parts;
 * 4 GiB bounds a package of many big parts. */
#define ZIPXML_TOTAL_MAX ((uint64_t)4 << 30)
/* Bytes actually inflated by one zipxml across all parse calls (a reader
 * may stream a sheet twice, for peek and for reading): the same bound. */
#define ZIPXML_INFLATED_MAX ((uint64_t)4 << 30)
/* Declared uncompressed/compressed ratio of a part before it is inflated.
 * Deflate cannot exceed about 1032:1 (RFC 1951 block limits, from memory);
 * a generated 1,000,000-row sheet measured 5.5:1, and highly repetitive
 * real sheets stay well under 100:1 (common practice); over 200 is a
 * bomb. */
#define ZIPXML_RATIO_MAX 200.0
/* Parts below this size are not ratio-checked: tiny parts compress oddly
 * and cannot do harm. */
#define ZIPXML_RATIO_FLOOR ((uint64_t)1 << 20)
/* Members in a package: a workbook has a few dozen; the central directory
 * is walked at open, so a million entries would cost time for nothing. */
#define ZIPXML_MEMBERS_MAX 100000u
/* Longest member name kept (ZIP allows 65535; workbook parts are short). */
#define ZIPXML_NAME_MAX 1024
/* Inflated bytes per expat call: big enough that the per-call cost is
 * noise, small enough to stay in cache. */
#define ZIPXML_CHUNK (128 * 1024)
/* expat's entity-amplification guard (on by default since 2.4.0; set here
 * so a library default can never loosen it): 100x output per input byte
 * after the first 8 MiB, expat's own defaults (libraries.md A4). DOCTYPE
 * is refused anyway, so no entity can be declared. */
#define ZIPXML_AMPLIFICATION_MAX 100.0f
#define ZIPXML_AMPLIFICATION_THRESHOLD (8ull << 20)

struct zipxml {
    unzFile uf;
    char *name;                 /* the file as messages name it */
    const char *member;         /* the part being parsed, or NULL */
    XML_Parser p;               /* the parser of that part */
    uint64_t inflated;          /* bytes inflated so far, all parts */
    int failed;                 /* a handler called zipxml_fail */
    int stopped;                /* a handler called zipxml_stop */
    rf_error fail;              /* ... with this error */
};

/* "FILE: part MEMBER" or with ":LINE" when line > 0. */
static void part_where(const zipxml *z, const char *member,
                       unsigned long line, char *buf, size_t n)
{
    /* names are cut so the place always fits its record */
    if (line > 0)
        snprintf(buf, n, "%.200s: part %.200s:%lu", z->name, member, line);
    else
        snprintf(buf, n, "%.200s: part %.200s", z->name, member);
}

rf_status zipxml_open(const char *path, const char *name, zipxml **out,
                      rf_error *err)
{
    *out = NULL;
    FILE *fp = fopen(path, "rb");
    if (fp == NULL)
        return error_set(err, RF_ESYSTEM, name, "cannot open: %s",
                         strerror(errno));
    fclose(fp);
    zipxml *z = calloc(1, sizeof *z);
    if (z == NULL)
        return error_nomem(err, name);
    z->name = strdup(name);
    if (z->name == NULL) {
        free(z);
        return error_nomem(err, name);
    }
    rf_status st = RF_OK;
    z->uf = unzOpen64(path);
    if (z->uf == NULL) {
        st = error_set(err, RF_EINPUT, name,
                       "not a zip package, or it is truncated or corrupt "
                       "(its table of contents cannot be read)");
        goto fail;
    }
    unz_global_info64 gi;
    if (unzGetGlobalInfo64(z->uf, &gi) != UNZ_OK) {
        st = error_set(err, RF_EINPUT, name, "corrupt zip package");
        goto fail;
    }
    if (gi.number_entry > ZIPXML_MEMBERS_MAX) {
        st = error_set(err, RF_EINPUT, name,
                       "the zip package has %llu members, more than the "
                       "%u a workbook can have", (unsigned long long)
                       gi.number_entry, ZIPXML_MEMBERS_MAX);
        goto fail;
    }
    uint64_t total = 0;
    int r = unzGoToFirstFile(z->uf);
    while (r == UNZ_OK) {
        unz_file_info64 fi;
        char mname[ZIPXML_NAME_MAX];
        if (unzGetCurrentFileInfo64(z->uf, &fi, mname, sizeof mname, NULL,
                                    0, NULL, 0) != UNZ_OK)
            break;
        if (fi.uncompressed_size > ZIPXML_PART_MAX) {
            char where[ERROR_WHERE_MAX];
            part_where(z, mname, 0, where, sizeof where);
            st = error_set(err, RF_EINPUT, where,
                           "declares %llu bytes uncompressed, more than the "
                           "limit of %llu (a zip bomb, or not a workbook)",
                           (unsigned long long)fi.uncompressed_size,
                           (unsigned long long)ZIPXML_PART_MAX);
            goto fail;
        }
        total += fi.uncompressed_size;
        if (total > ZIPXML_TOTAL_MAX) {
            st = error_set(err, RF_EINPUT, name,
                           "the zip package declares more than %llu bytes "
                           "uncompressed in all (a zip bomb, or not a "
                           "workbook)", (unsigned long long)ZIPXML_TOTAL_MAX);
            goto fail;
        }
        r = unzGoToNextFile(z->uf);
    }
    if (r != UNZ_END_OF_LIST_OF_FILE) {
        st = error_set(err, RF_EINPUT, name,
                       "corrupt zip package (its table of contents is "
                       "damaged)");
        goto fail;
    }
    *out = z;
    return RF_OK;
fail:
    zipxml_close(z);
    return st;
}

void zipxml_close(zipxml *z)
{
    if (z == NULL)
        return;
    if (z->uf != NULL)
        unzClose(z->uf);
    free(z->name);
    free(z);
}

int zipxml_has(const zipxml *z, const char *member)
{
    return unzLocateFile(z->uf, member, 1) == UNZ_OK;
}

const char *zipxml_member(const zipxml *z)
{
    return z->member;
}

unsigned long zipxml_line(const zipxml *z)
{
    return z->p != NULL ? (unsigned long)XML_GetCurrentLineNumber(z->p) : 0;
}

void zipxml_fail(zipxml *z, rf_status st, const char *where,
                 const char *fmt, ...)
{
    if (z->failed)
        return;  /* the first error is the one that counts */
    char place[ERROR_WHERE_MAX];
    if (where == NULL && z->member != NULL) {
        part_where(z, z->member, zipxml_line(z), place, sizeof place);
        where = place;
    }
    char msg[ERROR_MESSAGE_MAX];
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(msg, sizeof msg, fmt, ap);
    va_end(ap);
    z->failed = 1;
    error_set(&z->fail, st == RF_OK ? RF_EINPUT : st, where, "%s", msg);
    if (z->p != NULL)
        XML_StopParser(z->p, XML_FALSE);
}

void zipxml_stop(zipxml *z)
{
    if (z->failed || z->stopped)
        return;
    z->stopped = 1;
    if (z->p != NULL)
        XML_StopParser(z->p, XML_FALSE);
}

static void XMLCALL refuse_doctype(void *ud, const XML_Char *name,
                                   const XML_Char *sysid,
                                   const XML_Char *pubid, int has_internal)
{
    (void)name;
    (void)sysid;
    (void)pubid;
    (void)has_internal;
    zipxml_fail(ud, RF_EINPUT, NULL,
                "a DOCTYPE declaration, which workbook parts never have "
                "(refused: entity declarations can expand without bound)");
}

/* The handlers get the caller's ud; zipxml's own DOCTYPE handler needs z.
 * expat has one user-data pointer, so both go through this pair. */
typedef struct relay {
    zipxml *z;
    const zipxml_handlers *h;
    void *ud;
} relay;

static void XMLCALL relay_start(void *ud, const XML_Char *n,
                                const XML_Char **a)
{
    relay *r = ud;
    r->h->start(r->ud, n, a);
}

static void XMLCALL relay_end(void *ud, const XML_Char *n)
{
    relay *r = ud;
    r->h->end(r->ud, n);
}

static void XMLCALL relay_text(void *ud, const XML_Char *s, int len)
{
    relay *r = ud;
    r->h->text(r->ud, s, len);
}

static void XMLCALL relay_doctype(void *ud, const XML_Char *name,
                                  const XML_Char *sysid,
                                  const XML_Char *pubid, int has_internal)
{
    relay *r = ud;
    refuse_doctype(r->z, name, sysid, pubid, has_internal);
}

static rf_status part_error(zipxml *z, rf_error *err, unsigned long line,
                            const char *fmt, ...)
    __attribute__((format(printf, 4, 5)));

static rf_status part_error(zipxml *z, rf_error *err, unsigned long line,
                            const char *fmt, ...)
{
    char where[ERROR_WHERE_MAX], msg[ERROR_MESSAGE_MAX];
    part_where(z, z->member, line, where, sizeof where);
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(msg, sizeof msg, fmt, ap);
    va_end(ap);
    return error_set(err, RF_EINPUT, where, "%s", msg);
}

#define CORRUPT "corrupt or truncated part (its data does not match its " \
                "size or checksum)"

/* The part is located and its sizes are known: inflate and parse it. */
static rf_status stream(zipxml *z, rf_error *err)
{
    int open = 0;
    rf_status st = RF_OK;
    if (unzOpenCurrentFile(z->uf) != UNZ_OK)
        return part_error(z, err, 0, CORRUPT);
    open = 1;
    for (;;) {
        void *buf = XML_GetBuffer(z->p, ZIPXML_CHUNK);
        if (buf == NULL) {
            st = error_nomem(err, z->name);
            goto done;
        }
        int n = unzReadCurrentFile(z->uf, buf, ZIPXML_CHUNK);
        if (n < 0) {
            st = part_error(z, err, 0, CORRUPT);
            goto done;
        }
        z->inflated += (uint64_t)n;
        if (z->inflated > ZIPXML_INFLATED_MAX) {
            st = part_error(z, err, 0,
                            "more than %llu bytes inflated from this "
                            "package (a zip bomb, or not a workbook)",
                            (unsigned long long)ZIPXML_INFLATED_MAX);
            goto done;
        }
        if (n == 0) {
            /* The checksum first: a part cut at its declared size is
             * better reported as corrupt than as malformed XML. */
            open = 0;
            if (unzCloseCurrentFile(z->uf) != UNZ_OK) {
                st = part_error(z, err, 0, CORRUPT);
                goto done;
            }
        }
        if (XML_ParseBuffer(z->p, n, n == 0) != XML_STATUS_OK) {
            if (z->stopped && !z->failed)
                goto done;  /* st is RF_OK: the handler had enough */
            if (z->failed) {
                *err = z->fail;
                st = z->fail.status;
            } else {
                st = part_error(z, err, zipxml_line(z),
                                "malformed XML: %s",
                                XML_ErrorString(XML_GetErrorCode(z->p)));
            }
            goto done;
        }
        if (n == 0)
            break;
    }
done:
    if (open)
        unzCloseCurrentFile(z->uf);
    return st;
}

rf_status zipxml_parse(zipxml *z, const char *member,
                       const zipxml_handlers *h, void *ud, rf_error *err)
{
    char where[ERROR_WHERE_MAX];
    z->member = member;
    z->failed = 0;
    z->stopped = 0;
    part_where(z, member, 0, where, sizeof where);
    if (unzLocateFile(z->uf, member, 1) != UNZ_OK) {
        z->member = NULL;
        return error_set(err, RF_EINPUT, where,
                         "missing from the package");
    }
    unz_file_info64 fi;
    rf_status st = RF_OK;
    if (unzGetCurrentFileInfo64(z->uf, &fi, NULL, 0, NULL, 0, NULL, 0)
        != UNZ_OK) {
        st = error_set(err, RF_EINPUT, where, CORRUPT);
        goto out;
    }
    if (fi.flag & 1u) {
        st = error_set(err, RF_EINPUT, where,
                       "the part is encrypted; save the workbook without "
                       "a password");
        goto out;
    }
    if (fi.compression_method != 0 && fi.compression_method != Z_DEFLATED) {
        st = error_set(err, RF_EINPUT, where,
                       "compressed with method %lu; only stored (0) and "
                       "deflate (8) are read", (unsigned long)
                       fi.compression_method);
        goto out;
    }
    if (fi.uncompressed_size >= ZIPXML_RATIO_FLOOR
        && (double)fi.uncompressed_size >
               ZIPXML_RATIO_MAX * (double)(fi.compressed_size + 1)) {
        st = error_set(err, RF_EINPUT, where,
                       "declares %llu bytes from %llu compressed, a ratio "
                       "over %.0f:1 (a zip bomb)",
                       (unsigned long long)fi.uncompressed_size,
                       (unsigned long long)fi.compressed_size,
                       ZIPXML_RATIO_MAX);
        goto out;
    }
    z->p = XML_ParserCreateNS(NULL, ZIPXML_NS_SEP);
    if (z->p == NULL) {
        st = error_nomem(err, where);
        goto out;
    }
    if (!XML_SetBillionLaughsAttackProtectionMaximumAmplification(
            z->p, ZIPXML_AMPLIFICATION_MAX) ||
        !XML_SetBillionLaughsAttackProtectionActivationThreshold(
            z->p, ZIPXML_AMPLIFICATION_THRESHOLD)) {
        st = error_set(err, RF_ESYSTEM, where,
                       "the XML library refused its safety settings");
        goto out;
    }
    relay r = {z, h, ud};
    XML_SetUserData(z->p, &r);
    XML_SetElementHandler(z->p, h->start ? relay_start : NULL,
                          h->end ? relay_end : NULL);
    if (h->text != NULL)
        XML_SetCharacterDataHandler(z->p, relay_text);
    XML_SetStartDoctypeDeclHandler(z->p, relay_doctype);
    st = stream(z, err);
out:
    if (z->p != NULL)
        XML_ParserFree(z->p);
    z->p = NULL;
    z->member = NULL;
    return st;
}
