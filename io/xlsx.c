/*
 * xlsx.c: the .xlsx reader (see xlsx.h). Parts are found the way the
 * package says (ECMA-376 Part 2 relationships: _rels/.rels -> workbook ->
 * its .rels -> sheets, shared strings, styles), never by guessing names.
 * Every part is streamed through io/zipxml.c; only the shared strings and
 * the style table are kept, the sheet itself flows cell by cell into the
 * grid. Not a formula evaluator: a formula cell gives its cached value.
 *
 * Choices a user can see (docs/ should repeat them):
 * - A number cell is a date when its style's number format is a built-in
 *   date or date-time format (ids 14-17 and 22; ECMA-376 Part 1 18.8.30;
 *   also the East Asian date ids 27-36 and 50-58 listed there, from memory)
 *   or a custom code with a y or d token (either case) outside "quoted
 *   text", [brackets] and \-escapes; the value is the serial day number.
 * - A time-only format (built-in 18-21 and 45-47; a custom code with h, s
 *   or an elapsed [h] [m] [s] but no y or d, e.g. "hh:mm", "[h]:mm:ss")
 *   gives a plain number, the fraction of a day, as the .ods and .xls
 *   readers do: 12:00 reads 0.5. "m" is minute beside h or s and month
 *   otherwise, so a code of m alone ("mmm") is a date.
 * - A 1904-system workbook's serials get 1462 added, so every date is in
 *   the 1900 system (libraries.md, spreadsheet file facts).
 * - A cell without a cached value (<v>) is blank, unless it holds a
 *   formula (<f>): then it was written by a program that does not
 *   calculate (openpyxl), and the cell is unusable with XLSX_FORMULA_UNSAVED
 *   as the reason, never silently blank. An empty <v> counts as no value,
 *   except on a t="str" cell, whose result may be empty text.
 * - Error cells (#N/A, #DIV/0! ...) keep their text as the reason.
 */
#include "xlsx.h"

#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "csv.h"
#include "zipxml.h"

/* Shared strings are held for the whole read. 256 MiB is far past any
 * real workbook (a million distinct 100-byte strings is 100 MB) and stops a
 * crafted part from taking the machine's memory. Each string is charged
 * its bytes plus its index entry. */
#define XLSX_SST_BYTES_MAX ((size_t)256 << 20)
/* One cell's text. A cell holds at most 32,767 characters (libraries.md
 * A1), at most 4 bytes each in UTF-8; 1 MiB is a broken file. */
#define XLSX_CELL_TEXT_MAX ((size_t)1 << 20)
/* Number formats and cell styles: the spreadsheet programs stop at about
 * 64,000 formats (from memory); a million means a crafted part. */
#define XLSX_STYLES_MAX ((size_t)1 << 20)
/* Sheets in a workbook: the same reasoning, far past real workbooks. */
#define XLSX_SHEETS_MAX 10000u
/* Offset from a 1904-system serial to the 1900 system. */
#define XLSX_1904_OFFSET 1462.0
/* The reason given for a formula cell with no saved result; the same
 * family as io/xls.c's XLS_FORMULA_UNREADABLE. */
#define XLSX_FORMULA_UNSAVED \
    "#FORMULA: this formula has no saved result (the file was written by " \
    "a program that does not calculate); open it in a spreadsheet program " \
    "and save it"

typedef struct rel {
    char *id, *target, *type;  /* target resolved to a member name */
} rel;

typedef struct sheet_ref {
    char *name;
    char *rid;
    const char *part;  /* in the book's rels, or NULL */
    int is_sheet;      /* a worksheet (not a chart sheet) */
} sheet_ref;

typedef struct numfmt {
    uint32_t id;
    uint32_t seq;  /* place in the styles part: the last definition wins */
    int is_date;
} numfmt;

typedef struct book {
    zipxml *z;
    const char *name;
    rf_error *err;
    char *wb_part;
    rel *rels;
    size_t nrels, relcap;
    const char *rels_dir;      /* directory the rels being read resolve in */
    sheet_ref *sheets;
    size_t nsheets, sheetcap;
    int date1904;
    /* shared strings: NUL-terminated, off[i] is where string i starts */
    char *sst;
    size_t sst_len, sst_cap;
    size_t *sst_off;
    size_t nsst, sst_offcap;
    int in_si, in_t, in_rph;
    /* styles */
    numfmt *fmts;
    size_t nfmts, fmtcap;
    uint32_t *xf_fmt;
    size_t nxf, xfcap;
    unsigned char *xf_date;    /* per cellXfs index: a date format */
    int in_cellxfs;
} book;

/* ---- small helpers ---------------------------------------------------- */

static const char *local(const char *n)
{
    const char *p = strrchr(n, ZIPXML_NS_SEP);
    return p != NULL ? p + 1 : n;
}

/* An unprefixed attribute's value, or NULL. */
static const char *attr(const XML_Char **a, const char *name)
{
    for (; a[0] != NULL; a += 2)
        if (strcmp(a[0], name) == 0)
            return a[1];
    return NULL;
}

/* A namespaced attribute by local name (r:id), or NULL. */
static const char *attr_ns(const XML_Char **a, const char *name)
{
    for (; a[0] != NULL; a += 2)
        if (strchr(a[0], ZIPXML_NS_SEP) != NULL &&
            strcmp(local(a[0]), name) == 0)
            return a[1];
    return NULL;
}

/* Makes room for need elements of size elem; 0 on overflow or no memory. */
static int grow(void **p, size_t *cap, size_t need, size_t elem)
{
    if (need <= *cap)
        return 1;
    size_t n = *cap ? *cap : 16;
    while (n < need) {
        if (n > SIZE_MAX / 2)
            return 0;
        n *= 2;
    }
    if (n > SIZE_MAX / elem)
        return 0;
    void *q = realloc(*p, n * elem);
    if (q == NULL)
        return 0;
    *p = q;
    *cap = n;
    return 1;
}

static int ends_with(const char *s, const char *tail)
{
    size_t a = strlen(s), b = strlen(tail);
    return a >= b && strcmp(s + a - b, tail) == 0;
}

/* Member name for target as seen from directory dir ("xl/"): absolute
 * targets drop their '/', "./" and "../" segments are resolved. NULL on no
 * memory. */
static char *resolve(const char *dir, const char *target)
{
    size_t n = strlen(dir) + strlen(target) + 1;
    char *out = malloc(n);
    if (out == NULL)
        return NULL;
    if (target[0] == '/') {
        out[0] = '\0';
        target++;
    } else {
        strcpy(out, dir);
    }
    size_t len = strlen(out);
    while (*target != '\0') {
        const char *slash = strchr(target, '/');
        size_t seg = slash ? (size_t)(slash - target) : strlen(target);
        if (seg == 1 && target[0] == '.') {
            /* "./": nothing */
        } else if (seg == 2 && target[0] == '.' && target[1] == '.') {
            if (len > 0)
                len--;  /* the trailing '/' */
            while (len > 0 && out[len - 1] != '/')
                len--;
        } else {
            memcpy(out + len, target, seg);
            len += seg;
            if (slash)
                out[len++] = '/';
        }
        out[len] = '\0';
        target += seg + (slash ? 1 : 0);
    }
    return out;
}

/* "xl/workbook.xml" -> "xl/" (NUL-terminated copy). */
static char *dir_of(const char *part)
{
    const char *slash = strrchr(part, '/');
    size_t n = slash ? (size_t)(slash - part) + 1 : 0;
    char *d = malloc(n + 1);
    if (d != NULL) {
        memcpy(d, part, n);
        d[n] = '\0';
    }
    return d;
}

/* "xl/workbook.xml" -> "xl/_rels/workbook.xml.rels". */
static char *rels_of(const char *part)
{
    const char *slash = strrchr(part, '/');
    size_t dn = slash ? (size_t)(slash - part) + 1 : 0;
    const char *base = part + dn;
    size_t n = dn + strlen("_rels/") + strlen(base) + strlen(".rels") + 1;
    char *r = malloc(n);
    if (r != NULL)
        snprintf(r, n, "%.*s_rels/%s.rels", (int)dn, part, base);
    return r;
}

static void oom(book *b)
{
    zipxml_fail(b->z, RF_ENOMEM, NULL, "out of memory");
}

/* ---- relationships ---------------------------------------------------- */

static void book_free_rels(book *b)
{
    for (size_t i = 0; i < b->nrels; i++) {
        free(b->rels[i].id);
        free(b->rels[i].target);
        free(b->rels[i].type);
    }
    free(b->rels);
    b->rels = NULL;
    b->nrels = b->relcap = 0;
}

static void XMLCALL rels_start(void *ud, const XML_Char *n,
                               const XML_Char **a)
{
    book *b = ud;
    if (strcmp(local(n), "Relationship") != 0)
        return;
    const char *id = attr(a, "Id"), *target = attr(a, "Target");
    const char *type = attr(a, "Type"), *mode = attr(a, "TargetMode");
    if (id == NULL || target == NULL || (mode && strcmp(mode, "External")
                                                     == 0))
        return;
    if (b->nrels >= XLSX_SHEETS_MAX * 4) {
        zipxml_fail(b->z, RF_EINPUT, NULL, "more than %u relationships",
                    XLSX_SHEETS_MAX * 4);
        return;
    }
    if (!grow((void **)&b->rels, &b->relcap, b->nrels + 1, sizeof *b->rels)) {
        oom(b);
        return;
    }
    rel *r = &b->rels[b->nrels];
    r->id = strdup(id);
    r->target = resolve(b->rels_dir, target);
    r->type = strdup(type ? type : "");
    b->nrels++;
    if (r->id == NULL || r->target == NULL || r->type == NULL)
        oom(b);
}

static void XMLCALL ignore_end(void *ud, const XML_Char *n)
{
    (void)ud;
    (void)n;
}

static rf_status parse_rels(book *b, const char *member, const char *dir)
{
    zipxml_handlers h = {rels_start, ignore_end, NULL};
    b->rels_dir = dir;
    return zipxml_parse(b->z, member, &h, b, b->err);
}

/* The rel whose Type ends with tail ("/styles"), or NULL. */
static const rel *rel_by_type(const book *b, const char *tail)
{
    for (size_t i = 0; i < b->nrels; i++)
        if (ends_with(b->rels[i].type, tail))
            return &b->rels[i];
    return NULL;
}

/* ---- workbook --------------------------------------------------------- */

static void XMLCALL wb_start(void *ud, const XML_Char *n, const XML_Char **a)
{
    book *b = ud;
    const char *l = local(n);
    if (strcmp(l, "workbookPr") == 0) {
        const char *v = attr(a, "date1904");
        b->date1904 = v != NULL && (strcmp(v, "1") == 0 ||
                                    strcmp(v, "true") == 0);
    } else if (strcmp(l, "sheet") == 0) {
        const char *name = attr(a, "name"), *rid = attr_ns(a, "id");
        if (name == NULL || rid == NULL) {
            zipxml_fail(b->z, RF_EINPUT, NULL,
                        "a sheet without a name or a relationship id");
            return;
        }
        if (b->nsheets >= XLSX_SHEETS_MAX) {
            zipxml_fail(b->z, RF_EINPUT, NULL, "more than %u sheets",
                        XLSX_SHEETS_MAX);
            return;
        }
        if (!grow((void **)&b->sheets, &b->sheetcap, b->nsheets + 1,
                  sizeof *b->sheets)) {
            oom(b);
            return;
        }
        sheet_ref *s = &b->sheets[b->nsheets++];
        memset(s, 0, sizeof *s);
        s->name = strdup(name);
        s->rid = strdup(rid);
        if (s->name == NULL || s->rid == NULL)
            oom(b);
    }
}

static void book_close(book *b)
{
    zipxml_close(b->z);
    free(b->wb_part);
    book_free_rels(b);
    for (size_t i = 0; i < b->nsheets; i++) {
        free(b->sheets[i].name);
        free(b->sheets[i].rid);
    }
    free(b->sheets);
    free(b->sst);
    free(b->sst_off);
    free(b->fmts);
    free(b->xf_fmt);
    free(b->xf_date);
}

/* Opens the package and reads its workbook part: sheet names, their
 * parts, the date system, the rels of the workbook. */
static rf_status book_open(book *b, const char *path, const char *name,
                           rf_error *err)
{
    memset(b, 0, sizeof *b);
    b->name = name;
    b->err = err;
    rf_status st = zipxml_open(path, name, &b->z, err);
    if (st != RF_OK)
        return st;
    /* The package's root rels name the workbook part (ECMA-376 Part 2). */
    if (zipxml_has(b->z, "_rels/.rels")) {
        st = parse_rels(b, "_rels/.rels", "");
        if (st != RF_OK)
            return st;
        const rel *r = rel_by_type(b, "/officeDocument");
        if (r != NULL && (b->wb_part = strdup(r->target)) == NULL)
            return error_nomem(err, name);
        book_free_rels(b);
    }
    if (b->wb_part == NULL && (b->wb_part = strdup("xl/workbook.xml"))
                                  == NULL)
        return error_nomem(err, name);
    if (!zipxml_has(b->z, b->wb_part))
        return error_set(err, RF_EINPUT, name,
                         "a zip package but not an .xlsx workbook: it has "
                         "no workbook part (%s)", b->wb_part);
    char *dir = dir_of(b->wb_part), *rels = rels_of(b->wb_part);
    if (dir == NULL || rels == NULL) {
        free(dir);
        free(rels);
        return error_nomem(err, name);
    }
    st = parse_rels(b, rels, dir);
    free(dir);
    free(rels);
    if (st != RF_OK)
        return st;
    zipxml_handlers h = {wb_start, ignore_end, NULL};
    st = zipxml_parse(b->z, b->wb_part, &h, b, err);
    if (st != RF_OK)
        return st;
    if (b->nsheets == 0)
        return error_set(err, RF_EINPUT, name,
                         "the workbook lists no sheets");
    for (size_t i = 0; i < b->nsheets; i++)
        for (size_t j = 0; j < b->nrels; j++)
            if (strcmp(b->sheets[i].rid, b->rels[j].id) == 0) {
                b->sheets[i].part = b->rels[j].target;
                b->sheets[i].is_sheet =
                    ends_with(b->rels[j].type, "/worksheet");
                break;
            }
    return RF_OK;
}

/* ---- shared strings --------------------------------------------------- */

static int sst_put(book *b, const char *s, size_t len)
{
    if (b->sst_len + len + 1 + b->nsst * sizeof(size_t) >
        XLSX_SST_BYTES_MAX) {
        zipxml_fail(b->z, RF_EINPUT, NULL,
                    "the shared strings take more than %zu MiB, past the "
                    "limit (a crafted file, or not a workbook)",
                    XLSX_SST_BYTES_MAX >> 20);
        return 0;
    }
    if (!grow((void **)&b->sst, &b->sst_cap, b->sst_len + len + 1, 1)) {
        oom(b);
        return 0;
    }
    memcpy(b->sst + b->sst_len, s, len);
    b->sst_len += len;
    return 1;
}

static void XMLCALL sst_start(void *ud, const XML_Char *n,
                              const XML_Char **a)
{
    book *b = ud;
    const char *l = local(n);
    (void)a;
    if (strcmp(l, "si") == 0) {
        if (!grow((void **)&b->sst_off, &b->sst_offcap, b->nsst + 1,
                  sizeof *b->sst_off)) {
            oom(b);
            return;
        }
        b->sst_off[b->nsst] = b->sst_len;
        b->in_si = 1;
    } else if (strcmp(l, "rPh") == 0) {
        b->in_rph = 1;  /* phonetic reading: not part of the text */
    } else if (strcmp(l, "t") == 0 && b->in_si && !b->in_rph) {
        b->in_t = 1;
    }
}

static void XMLCALL sst_end(void *ud, const XML_Char *n)
{
    book *b = ud;
    const char *l = local(n);
    if (strcmp(l, "si") == 0 && b->in_si) {
        if (sst_put(b, "", 1))
            b->nsst++;
        b->in_si = 0;
    } else if (strcmp(l, "rPh") == 0) {
        b->in_rph = 0;
    } else if (strcmp(l, "t") == 0) {
        b->in_t = 0;
    }
}

static void XMLCALL sst_text(void *ud, const XML_Char *s, int len)
{
    book *b = ud;
    if (b->in_t)
        sst_put(b, s, (size_t)len);
}

/* ---- styles ----------------------------------------------------------- */

/* A built-in number format id that shows a date (ECMA-376 Part 1 18.8.30:
 * 14-17 and 22; 27-36 and 50-58 in East Asian locales, from memory). The
 * time-only ids 18-21 and 45-47 are not dates (see the file comment). */
static int builtin_date(uint32_t id)
{
    return (id >= 14 && id <= 17) || id == 22 ||
           (id >= 27 && id <= 36) || (id >= 50 && id <= 58);
}

/* "h", "hh", "m", "s" ... inside [brackets]: an elapsed-time token. */
static int elapsed_token(const char *p, const char *end)
{
    if (p == end)
        return 0;
    char ch = (char)(*p | 0x20);
    if (ch != 'h' && ch != 'm' && ch != 's')
        return 0;
    for (; p < end; p++)
        if ((char)(*p | 0x20) != ch)
            return 0;
    return 1;
}

/* A custom format code that shows a date (see the file comment): a y or d
 * token, or m with no h or s beside it (a month). Time-only codes are 0. */
static int code_is_date(const char *code)
{
    int yd = 0, hs = 0, m = 0;
    for (const char *p = code; *p != '\0'; p++) {
        switch (*p) {
        case '"':
            p = strchr(p + 1, '"');
            if (p == NULL)
                return yd || (m && !hs);
            break;
        case '[': {
            const char *q = strchr(p + 1, ']');
            if (q == NULL)
                return yd || (m && !hs);
            if (elapsed_token(p + 1, q))
                hs = 1;
            p = q;
            break;
        }
        case '\\': case '_': case '*':  /* escape, space-as-wide, fill */
            if (p[1] == '\0')
                return yd || (m && !hs);
            p++;
            break;
        case 'y': case 'Y': case 'd': case 'D':
            yd = 1;
            break;
        case 'h': case 'H': case 's': case 'S':
            hs = 1;
            break;
        case 'm': case 'M':
            m = 1;
            break;
        default:
            break;
        }
    }
    return yd || (m && !hs);
}

static int parse_u32(const char *s, uint32_t *v)
{
    uint64_t x = 0;
    if (s == NULL || *s == '\0')
        return 0;
    for (; *s; s++) {
        if (*s < '0' || *s > '9')
            return 0;
        x = x * 10 + (uint64_t)(*s - '0');
        if (x > UINT32_MAX)
            return 0;
    }
    *v = (uint32_t)x;
    return 1;
}

static void XMLCALL st_start(void *ud, const XML_Char *n, const XML_Char **a)
{
    book *b = ud;
    const char *l = local(n);
    uint32_t id;
    if (strcmp(l, "cellXfs") == 0) {
        b->in_cellxfs = 1;
    } else if (strcmp(l, "xf") == 0 && b->in_cellxfs) {
        if (b->nxf >= XLSX_STYLES_MAX) {
            zipxml_fail(b->z, RF_EINPUT, NULL, "more than %zu cell styles",
                        XLSX_STYLES_MAX);
            return;
        }
        if (!grow((void **)&b->xf_fmt, &b->xfcap, b->nxf + 1,
                  sizeof *b->xf_fmt)) {
            oom(b);
            return;
        }
        b->xf_fmt[b->nxf++] = parse_u32(attr(a, "numFmtId"), &id) ? id : 0;
    } else if (strcmp(l, "numFmt") == 0) {
        const char *code = attr(a, "formatCode");
        if (!parse_u32(attr(a, "numFmtId"), &id) || code == NULL)
            return;
        if (b->nfmts >= XLSX_STYLES_MAX) {
            zipxml_fail(b->z, RF_EINPUT, NULL,
                        "more than %zu number formats", XLSX_STYLES_MAX);
            return;
        }
        if (!grow((void **)&b->fmts, &b->fmtcap, b->nfmts + 1,
                  sizeof *b->fmts)) {
            oom(b);
            return;
        }
        b->fmts[b->nfmts].id = id;
        b->fmts[b->nfmts].seq = (uint32_t)b->nfmts;
        b->fmts[b->nfmts].is_date = code_is_date(code);
        b->nfmts++;
    }
}

static void XMLCALL st_end(void *ud, const XML_Char *n)
{
    book *b = ud;
    if (strcmp(local(n), "cellXfs") == 0)
        b->in_cellxfs = 0;
}

static int numfmt_order(const void *pa, const void *pb)
{
    const numfmt *a = pa, *b = pb;
    if (a->id != b->id)
        return a->id < b->id ? -1 : 1;
    return a->seq < b->seq ? -1 : a->seq > b->seq;
}

static int numfmt_find(const void *key, const void *elem)
{
    uint32_t id = *(const uint32_t *)key, e = ((const numfmt *)elem)->id;
    return id < e ? -1 : id > e;
}

static rf_status read_styles(book *b, const char *part)
{
    zipxml_handlers h = {st_start, st_end, NULL};
    rf_status st = zipxml_parse(b->z, part, &h, b, b->err);
    if (st != RF_OK)
        return st;
    b->xf_date = calloc(b->nxf + 1, 1);
    if (b->xf_date == NULL)
        return error_nomem(b->err, b->name);
    /* Sorted by id once, then looked up: a crafted part with a million
     * styles and a million formats must not cost their product. A custom
     * code may redefine an id; the last definition wins, so of each run of
     * one id only the last (by seq) is kept. */
    size_t n = 0;
    if (b->nfmts > 0) {
        qsort(b->fmts, b->nfmts, sizeof *b->fmts, numfmt_order);
        for (size_t j = 0; j < b->nfmts; j++) {
            if (n > 0 && b->fmts[n - 1].id == b->fmts[j].id)
                n--;
            b->fmts[n++] = b->fmts[j];
        }
    }
    for (size_t i = 0; i < b->nxf; i++) {
        uint32_t id = b->xf_fmt[i];
        const numfmt *f = n > 0 ? bsearch(&id, b->fmts, n, sizeof *b->fmts,
                                          numfmt_find)
                                : NULL;
        b->xf_date[i] = (unsigned char)(f != NULL ? f->is_date
                                                  : builtin_date(id));
    }
    return RF_OK;
}

/* ---- the sheet -------------------------------------------------------- */

enum { T_N, T_S, T_B, T_E, T_STR, T_INLINE, T_D };

typedef struct sheet_ctx {
    book *b;
    grid *g;               /* NULL when only measuring the used size */
    const char *sheet;
    char ns[256];          /* the root element's namespace and separator */
    size_t nslen;
    int root_seen;
    int in_data, in_cell, in_is, in_rph, collect, have_v;
    int have_f;            /* the cell holds a formula (<f>) */
    uint32_t row, next_col;
    uint32_t crow, ccol, cstyle;
    int ctype;
    char *buf;             /* the cell's text, reused for every cell */
    size_t len, cap;
    uint32_t used_rows, used_cols;
    int measured;          /* used size known from <dimension> */
} sheet_ctx;

static void cell_fail(sheet_ctx *c, const char *fmt, ...)
    __attribute__((format(printf, 2, 3)));

static void cell_fail(sheet_ctx *c, const char *fmt, ...)
{
    char where[ERROR_WHERE_MAX], letters[16], msg[ERROR_MESSAGE_MAX];
    table_column_letters(c->ccol, letters, sizeof letters);
    snprintf(where, sizeof where, "%s[%s]!%s%lu", c->b->name, c->sheet,
             letters, (unsigned long)c->crow);
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(msg, sizeof msg, fmt, ap);
    va_end(ap);
    zipxml_fail(c->b->z, RF_EINPUT, where, "%s", msg);
}

/* "AB12" -> col 27, row 12. Letters only ("AB") leave *row alone. A
 * number too big for 32 bits saturates; the grid rejects it. */
static int parse_ref(const char *s, uint32_t *col, uint32_t *row)
{
    uint32_t cl = 0;
    int nl = 0;
    for (; *s >= 'A' && *s <= 'Z'; s++, nl++) {
        if (nl == 4)
            return 0;
        cl = cl * 26 + (uint32_t)(*s - 'A' + 1);
    }
    if (nl == 0)
        return 0;
    *col = cl - 1;
    if (*s == '\0')
        return 1;
    uint64_t r = 0;
    for (; *s >= '0' && *s <= '9'; s++)
        if (r <= UINT32_MAX)
            r = r * 10 + (uint64_t)(*s - '0');
    if (*s != '\0' || r == 0)
        return 0;
    *row = r > UINT32_MAX ? UINT32_MAX : (uint32_t)r;
    return 1;
}

static int is_digit(char ch)
{
    return ch >= '0' && ch <= '9';
}

static int two(const char *s)
{
    return is_digit(s[0]) && is_digit(s[1]) ? (s[0] - '0') * 10 + s[1] - '0'
                                            : -1;
}

/* ISO 8601 date or date-time of a t="d" cell: YYYY-MM-DD, optionally with
 * THH:MM[:SS[.fff]] and a trailing Z (ECMA-376 Part 1 18.17.4.1). */
static int parse_iso(const char *s, size_t n, double *serial)
{
    if (n < 10 || s[4] != '-' || s[7] != '-')
        return 0;
    int c1 = two(s), c2 = two(s + 2), m = two(s + 5), d = two(s + 8);
    if (c1 < 0 || c2 < 0 || m < 0 || d < 0)
        return 0;
    double day = table_date_serial(c1 * 100 + c2, m, d);
    if (day < 0)
        return 0;
    size_t i = 10;
    double frac = 0;
    if (i < n && s[i] == 'T') {
        if (n < i + 6 || s[i + 3] != ':')
            return 0;
        int h = two(s + i + 1), mi = two(s + i + 4);
        double sec = 0;
        i += 6;
        if (i < n && s[i] == ':') {
            if (n < i + 3 || two(s + i + 1) < 0)
                return 0;
            sec = two(s + i + 1);
            i += 3;
            if (i < n && s[i] == '.') {
                double scale = 0.1;
                for (i++; i < n && is_digit(s[i]); i++, scale /= 10)
                    sec += (s[i] - '0') * scale;
            }
        }
        if (h < 0 || h > 24 || mi < 0 || mi > 59 || sec >= 61)
            return 0;
        frac = (h * 3600.0 + mi * 60.0 + sec) / 86400.0;
    }
    if (i < n && s[i] == 'Z')
        i++;
    if (i != n)
        return 0;
    *serial = day + frac;
    return 1;
}

/* Element name -> its local name when it is in the sheet's namespace (the
 * root's), else NULL. Compares the namespace once per element, which is
 * cheaper than searching for the separator. */
static const char *sheet_local(const sheet_ctx *c, const char *n)
{
    if (c->nslen == 0)
        return strchr(n, ZIPXML_NS_SEP) ? NULL : n;
    if (strncmp(n, c->ns, c->nslen) != 0)
        return NULL;
    return n + c->nslen;
}

static void grid_failed(sheet_ctx *c, rf_status st, const rf_error *e)
{
    zipxml_fail(c->b->z, st, e->where, "%s", e->message);
}

/* A formula with no saved result: no <v>, or an empty one where empty
 * text is not a result (see the file comment). */
static int formula_unsaved(const sheet_ctx *c)
{
    return c->have_f && (!c->have_v || (c->len == 0 && c->ctype != T_STR));
}

static void emit(sheet_ctx *c)
{
    int unsaved = formula_unsaved(c);
    if (!c->have_v && !unsaved)
        return;
    if (c->g == NULL) {  /* measuring */
        if (c->len > 0 || c->ctype == T_S || unsaved) {
            if (c->crow > c->used_rows)
                c->used_rows = c->crow;
            if (c->ccol + 1 > c->used_cols)
                c->used_cols = c->ccol + 1;
        }
        return;
    }
    rf_error e;
    rf_status st = RF_OK;
    double v;
    const char *s = c->buf;
    size_t len = c->len;
    if (unsaved) {
        st = grid_error(c->g, c->crow, c->ccol, XLSX_FORMULA_UNSAVED,
                        strlen(XLSX_FORMULA_UNSAVED), &e);
        if (st != RF_OK)
            grid_failed(c, st, &e);
        return;
    }
    switch (c->ctype) {
    case T_N:
        if (len == 0)
            return;
        if (!csv_parse_number(s, len, &v)) {
            cell_fail(c, "'%.*s' is not a number", (int)(len > 40 ? 40
                      : len), s);
            return;
        }
        if (c->cstyle < c->b->nxf && c->b->xf_date[c->cstyle])
            st = grid_date(c->g, c->crow, c->ccol,
                           v + (c->b->date1904 ? XLSX_1904_OFFSET : 0), &e);
        else
            st = grid_number(c->g, c->crow, c->ccol, v, &e);
        break;
    case T_S: {
        uint64_t i = 0;
        size_t k = 0;
        for (; k < len && is_digit(s[k]) && i <= c->b->nsst; k++)
            i = i * 10 + (uint64_t)(s[k] - '0');
        if (k == 0 || k != len || i >= c->b->nsst) {
            cell_fail(c, "shared string '%.*s' does not exist "
                      "(the workbook has %zu)", (int)(len > 20 ? 20
                      : len), s, c->b->nsst);
            return;
        }
        size_t off = c->b->sst_off[i];
        size_t end = i + 1 < c->b->nsst ? c->b->sst_off[i + 1]
                                        : c->b->sst_len;
        st = grid_text(c->g, c->crow, c->ccol, c->b->sst + off,
                       end - off - 1, &e);
        break;
    }
    case T_B:
        if (len == 1 && (s[0] == '0' || s[0] == '1'))
            st = grid_bool(c->g, c->crow, c->ccol, s[0] == '1', &e);
        else if (table_word_is(s, len, "true") ||
                 table_word_is(s, len, "false"))
            st = grid_bool(c->g, c->crow, c->ccol, s[0] == 't' ||
                           s[0] == 'T', &e);
        else
            {
            cell_fail(c, "'%.*s' is not a yes-no value",
                             (int)(len > 40 ? 40 : len), s);
            return;
        }
        break;
    case T_E:
        st = grid_error(c->g, c->crow, c->ccol, s, len, &e);
        break;
    case T_STR:
    case T_INLINE:
        st = grid_text(c->g, c->crow, c->ccol, s, len, &e);
        break;
    case T_D:
        if (len == 0)
            return;
        if (!parse_iso(s, len, &v)) {
            cell_fail(c, "'%.*s' is not an ISO 8601 date",
                      (int)(len > 40 ? 40 : len), s);
            return;
        }
        st = grid_date(c->g, c->crow, c->ccol, v, &e);
        break;
    default:
        break;
    }
    if (st != RF_OK)
        grid_failed(c, st, &e);
}

static int cell_type_of(const char *t)
{
    switch (t[0]) {
    case 'n': return t[1] == '\0' ? T_N : -1;
    case 's': return t[1] == '\0' ? T_S : strcmp(t, "str") == 0 ? T_STR : -1;
    case 'b': return t[1] == '\0' ? T_B : -1;
    case 'e': return t[1] == '\0' ? T_E : -1;
    case 'd': return t[1] == '\0' ? T_D : -1;
    case 'i': return strcmp(t, "inlineStr") == 0 ? T_INLINE : -1;
    default:  return -1;
    }
}

static void start_cell(sheet_ctx *c, const XML_Char **a)
{
    const char *ref = NULL, *t = NULL, *s = NULL;
    for (; a[0] != NULL; a += 2) {
        if (a[0][1] != '\0')
            continue;
        if (a[0][0] == 'r')
            ref = a[1];
        else if (a[0][0] == 't')
            t = a[1];
        else if (a[0][0] == 's')
            s = a[1];
    }
    c->in_cell = 1;
    c->have_v = 0;
    c->have_f = 0;
    c->len = 0;
    c->ccol = c->next_col;
    c->crow = c->row == 0 ? 1 : c->row;
    c->cstyle = 0;
    c->ctype = T_N;
    if (ref != NULL && !parse_ref(ref, &c->ccol, &c->crow)) {
        cell_fail(c, "'%.40s' is not a cell reference", ref);
        return;
    }
    if (t != NULL && (c->ctype = cell_type_of(t)) < 0) {
        cell_fail(c, "unknown cell type '%.20s'", t);
        return;
    }
    if (s != NULL && !parse_u32(s, &c->cstyle)) {
        cell_fail(c, "style '%.20s' is not a number", s);
        return;
    }
}

static void XMLCALL sh_start(void *ud, const XML_Char *n,
                             const XML_Char **a)
{
    sheet_ctx *c = ud;
    if (!c->root_seen) {
        c->root_seen = 1;
        const char *sep = strchr(n, ZIPXML_NS_SEP);
        if (sep != NULL && (size_t)(sep - n) + 1 < sizeof c->ns) {
            c->nslen = (size_t)(sep - n) + 1;
            memcpy(c->ns, n, c->nslen);
            c->ns[c->nslen] = '\0';
        }
        return;
    }
    const char *l = sheet_local(c, n);
    if (l == NULL)
        return;
    if (c->in_cell) {
        if (l[0] == 'v' && l[1] == '\0') {
            c->collect = 1;
            c->have_v = 1;
            c->len = 0;
        } else if (l[0] == 'f' && l[1] == '\0') {
            c->have_f = 1;  /* its text is not collected: never evaluated */
        } else if (strcmp(l, "is") == 0) {
            c->in_is = 1;
            c->have_v = 1;
            c->len = 0;
        } else if (c->in_is && l[0] == 't' && l[1] == '\0' && !c->in_rph) {
            c->collect = 1;
        } else if (strcmp(l, "rPh") == 0) {
            c->in_rph = 1;
        }
    } else if (c->in_data) {
        if (l[0] == 'c' && l[1] == '\0') {
            start_cell(c, a);
        } else if (strcmp(l, "row") == 0) {
            const char *r = attr(a, "r");
            uint32_t v;
            if (r == NULL) {
                c->row++;
            } else if (parse_u32(r, &v) && v > 0) {
                c->row = v;
            } else {
                zipxml_fail(c->b->z, RF_EINPUT, NULL,
                            "row number '%.20s' is not a positive whole "
                            "number", r);
                return;
            }
            c->next_col = 0;
        }
    } else if (strcmp(l, "sheetData") == 0) {
        c->in_data = 1;
    } else if (c->g == NULL && strcmp(l, "dimension") == 0) {
        const char *ref = attr(a, "ref");
        const char *colon = ref ? strchr(ref, ':') : NULL;
        uint32_t col = 0, row = 0;
        if (ref != NULL && parse_ref(colon ? colon + 1 : ref, &col, &row)
            && row > 0) {
            /* A lone "A1" is what writers put for an empty sheet too; the
             * stream tells those apart. */
            if (colon != NULL || strcmp(ref, "A1") != 0) {
                c->used_rows = row;
                c->used_cols = col + 1;
                c->measured = 1;
                zipxml_stop(c->b->z);
            }
        }
    }
}

static void XMLCALL sh_end(void *ud, const XML_Char *n)
{
    sheet_ctx *c = ud;
    const char *l = sheet_local(c, n);
    if (l == NULL || !c->in_data)
        return;
    if (c->in_cell) {
        if ((l[0] == 'v' || l[0] == 't') && l[1] == '\0') {
            c->collect = 0;
        } else if (strcmp(l, "is") == 0) {
            c->in_is = 0;
        } else if (strcmp(l, "rPh") == 0) {
            c->in_rph = 0;
        } else if (l[0] == 'c' && l[1] == '\0') {
            c->in_cell = 0;
            c->collect = 0;
            c->in_is = c->in_rph = 0;
            emit(c);
            c->row = c->crow;
            c->next_col = c->ccol + 1;
        }
    } else if (strcmp(l, "sheetData") == 0) {
        c->in_data = 0;
        if (c->g == NULL)
            zipxml_stop(c->b->z);
    }
}

static void XMLCALL sh_text(void *ud, const XML_Char *s, int n)
{
    sheet_ctx *c = ud;
    if (!c->collect)
        return;
    size_t len = (size_t)n;
    if (c->len + len > XLSX_CELL_TEXT_MAX) {
        cell_fail(c, "the cell holds more than %zu bytes of text",
                  XLSX_CELL_TEXT_MAX);
        return;
    }
    if (c->len + len + 1 > c->cap &&
        !grow((void **)&c->buf, &c->cap, c->len + len + 1, 1)) {
        oom(c->b);
        return;
    }
    memcpy(c->buf + c->len, s, len);
    c->len += len;
}

static rf_status stream_sheet(book *b, sheet_ctx *c, const char *part)
{
    zipxml_handlers h = {sh_start, sh_end, sh_text};
    c->b = b;
    c->cap = 256;
    c->buf = malloc(c->cap);
    if (c->buf == NULL)
        return error_nomem(b->err, b->name);
    rf_status st = zipxml_parse(b->z, part, &h, c, b->err);
    free(c->buf);
    c->buf = NULL;
    return st;
}

/* ---- public ----------------------------------------------------------- */

rf_status xlsx_read(const char *path, const char *name, const char *sheet,
                    uint32_t header, table **out, rf_warnings *warn,
                    rf_error *err)
{
    *out = NULL;
    book b;
    grid *g = NULL;
    const char **names = NULL;
    rf_status st = book_open(&b, path, name, err);
    if (st != RF_OK)
        goto done;
    names = malloc(b.nsheets * sizeof *names);
    if (names == NULL) {
        st = error_nomem(err, name);
        goto done;
    }
    for (size_t i = 0; i < b.nsheets; i++)
        names[i] = b.sheets[i].name;
    size_t idx;
    st = grid_pick_sheet(name, sheet, names, b.nsheets, &idx, err);
    if (st != RF_OK)
        goto done;
    const sheet_ref *sr = &b.sheets[idx];
    if (sr->part == NULL || !sr->is_sheet) {
        st = error_set(err, RF_EINPUT, name,
                       sr->part == NULL
                           ? "sheet '%s' has no part in the package"
                           : "sheet '%s' is a chart, not a sheet of cells",
                       sr->name);
        goto done;
    }
    const rel *r = rel_by_type(&b, "/styles");
    if (r != NULL && zipxml_has(b.z, r->target)) {
        st = read_styles(&b, r->target);
        if (st != RF_OK)
            goto done;
    }
    /* A listed but absent strings or styles part is tolerated: a cell
     * that needs it fails with its own place. */
    r = rel_by_type(&b, "/sharedStrings");
    if (r != NULL && zipxml_has(b.z, r->target)) {
        zipxml_handlers h = {sst_start, sst_end, sst_text};
        st = zipxml_parse(b.z, r->target, &h, &b, err);
        if (st != RF_OK)
            goto done;
    }
    g = grid_create(name, sr->name, header);
    if (g == NULL) {
        st = error_nomem(err, name);
        goto done;
    }
    sheet_ctx c;
    memset(&c, 0, sizeof c);
    c.g = g;
    c.sheet = sr->name;
    st = stream_sheet(&b, &c, sr->part);
    if (st != RF_OK)
        goto done;
    st = grid_finish(g, out, warn, err);
done:
    grid_free(g);
    free(names);
    book_close(&b);
    if (st != RF_OK && *out != NULL) {
        table_free(*out);
        *out = NULL;
    }
    return st;
}

rf_status xlsx_sheets(const char *path, const char *name, grid_sheet **out,
                      size_t *n, rf_error *err)
{
    *out = NULL;
    *n = 0;
    book b;
    grid_sheet *s = NULL;
    rf_status st = book_open(&b, path, name, err);
    if (st != RF_OK)
        goto done;
    s = calloc(b.nsheets, sizeof *s);
    if (s == NULL) {
        st = error_nomem(err, name);
        goto done;
    }
    for (size_t i = 0; i < b.nsheets; i++) {
        if ((s[i].name = strdup(b.sheets[i].name)) == NULL) {
            st = error_nomem(err, name);
            goto done;
        }
        if (b.sheets[i].part == NULL || !b.sheets[i].is_sheet)
            continue;
        sheet_ctx c;
        memset(&c, 0, sizeof c);
        c.sheet = b.sheets[i].name;
        st = stream_sheet(&b, &c, b.sheets[i].part);
        if (st != RF_OK)
            goto done;
        s[i].rows = c.used_rows;
        s[i].cols = c.used_cols;
    }
done:
    if (st == RF_OK) {
        *out = s;
        *n = b.nsheets;
    } else {
        grid_sheets_free(s, b.nsheets);
    }
    book_close(&b);
    return st;
}
