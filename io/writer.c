/*
 * writer.c: the result workbook writer (see writer.h). A thin layer over
 * libxlsxwriter 1.1.4 in constant-memory mode that adds the file rules
 * (temporary file + rename, never replace an input or a foreign file) and
 * the cell rules (no NaN/Inf, text never a formula, valid UTF-8 only).
 * Not a layout engine: engine/report.c decides what goes where.
 *
 * Locale: libxlsxwriter 1.1.4 as built by Debian prints numbers with
 * snprintf("%.16G"), which follows LC_NUMERIC (libraries.md A1). Every call
 * into the library therefore runs under a private "C" locale installed with
 * uselocale() for the calling thread only, so a caller's setlocale() cannot
 * turn 1.5 into "1,5" in the file.
 */
#include "writer.h"

#include <errno.h>
#include <fcntl.h>
#include <locale.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include <expat.h>
#include <minizip/unzip.h>
#include <xlsxwriter.h>

/* Limits, each with its reason. */
enum {
    /* Longest text a cell holds: 32,767 characters (libraries.md A1). Counting
     * bytes is stricter, since a character is at least one byte and at most
     * two UTF-16 units for four UTF-8 bytes. */
    CELL_TEXT_MAX = 32767,
    /* docProps/custom.xml holds a handful of properties; anything larger is
     * not a file we wrote, and capping it bounds writer_is_ours' work. */
    CUSTOM_XML_MAX = 1 << 20,
    /* The value of our mark is a short program name and version. */
    MARK_VALUE_MAX = 256,
    /* Attempts at an unused temporary name before giving up. */
    TMP_TRIES = 100,
    /* Bytes of the target's name kept in the temporary name, so the latter
     * stays under NAME_MAX (255). */
    TMP_BASE_MAX = 200
};

#define MARK_NAME "rowfit"
#define NS_CUSTOM \
    "http://schemas.openxmlformats.org/officeDocument/2006/custom-properties"
#define NS_VTYPES \
    "http://schemas.openxmlformats.org/officeDocument/2006/docPropsVTypes"

struct writer_sheet {
    writer *w;
    lxw_worksheet *ws;
    char *name;
    int64_t row;            /* highest row written so far, -1 before any */
};

struct writer {
    lxw_workbook *wb;
    lxw_format *fmt[WFMT_COUNT_];
    lxw_format *header_fmt;
    locale_t cloc;
    char *path;             /* the target */
    char *dir;              /* its folder: temporary files go there */
    char *tmp;              /* the temporary file that becomes path */
    const char *base;       /* path's last component, for places */
    char *creator;
    writer_sheet **sheets;
    size_t n_sheets, cap_sheets;
    rf_warnings *warnings;
    time_t created;
    rf_error first;         /* first cell failure; status RF_OK when none */
};

/* ---------------------------------------------------------------- text */

/* Length of the valid UTF-8 sequence at s (RFC 3629, which also rules out
 * overlong forms and surrogates), or 0 when the bytes there are not one. */
static size_t utf8_len(const unsigned char *s)
{
    unsigned char c = s[0];
    if (c < 0x80)
        return 1;
    if (c >= 0xC2 && c <= 0xDF)
        return (s[1] & 0xC0) == 0x80 ? 2 : 0;
    if (c >= 0xE0 && c <= 0xEF) {
        unsigned char lo = c == 0xE0 ? 0xA0 : 0x80;
        unsigned char hi = c == 0xED ? 0x9F : 0xBF;
        if (s[1] < lo || s[1] > hi || (s[2] & 0xC0) != 0x80)
            return 0;
        /* U+FFFE and U+FFFF are not allowed in XML 1.0. */
        if (c == 0xEF && s[1] == 0xBF && (s[2] == 0xBE || s[2] == 0xBF))
            return 0;
        return 3;
    }
    if (c >= 0xF0 && c <= 0xF4) {
        unsigned char lo = c == 0xF0 ? 0x90 : 0x80;
        unsigned char hi = c == 0xF4 ? 0x8F : 0xBF;
        if (s[1] < lo || s[1] > hi || (s[2] & 0xC0) != 0x80
            || (s[3] & 0xC0) != 0x80)
            return 0;
        return 4;
    }
    return 0;
}

static int is_hex(unsigned char c)
{
    return (c >= '0' && c <= '9') || (c >= 'a' && c <= 'f')
        || (c >= 'A' && c <= 'F');
}

/* 1 when s starts "_xHHHH_", which a reader would decode as the character
 * U+HHHH; a literal one must be written with its underscore escaped as
 * "_x005F_" (ECMA-376 Part 1, ST_Xstring; from memory). libxlsxwriter escapes
 * control characters this way but not a literal "_xHHHH_". */
static int is_x_escape(const char *s)
{
    if (s[0] != '_' || s[1] != 'x')
        return 0;
    for (int i = 2; i < 6; i++)
        if (!is_hex((unsigned char)s[i]))
            return 0;
    return s[6] == '_';
}

/* What clean_text found. */
typedef struct text_fix {
    size_t replaced;        /* bad bytes replaced with U+FFFD */
    int cut;                /* the text was cut to cap bytes */
} text_fix;

/* Makes text safe for a cell: bad UTF-8 bytes become U+FFFD, a literal
 * "_xHHHH_" is escaped when escape_x, and the result is cut at a character
 * boundary to at most cap bytes. Returns text itself when nothing needed
 * changing, else a malloc'd copy (the caller frees it when != text), or NULL
 * on no memory. */
static char *clean_text(const char *text, int escape_x, size_t cap,
                        text_fix *fix)
{
    fix->replaced = 0;
    fix->cut = 0;
    size_t len = 0;
    int dirty = 0;
    for (const char *p = text; *p; ) {
        size_t k = utf8_len((const unsigned char *)p);
        if (k == 0 || (escape_x && is_x_escape(p)))
            dirty = 1;
        p += k ? k : 1;
        len += k ? k : 1;
    }
    if (!dirty && len <= cap)
        return (char *)text;

    /* The loop below stops before passing cap bytes, whatever the growth
     * (a bad byte becomes 3 bytes, an escaped underscore 7). */
    size_t size = cap + 1;
    char *out = malloc(size);
    if (out == NULL)
        return NULL;
    size_t n = 0;
    for (const char *p = text; *p; ) {
        size_t k = utf8_len((const unsigned char *)p);
        const char *piece = p;
        size_t piece_len = k;
        int esc = 0;
        if (k == 0) {
            piece = "\xEF\xBF\xBD";
            piece_len = 3;
        } else if (escape_x && is_x_escape(p)) {
            /* The underscore itself becomes "_x005F_". */
            esc = 1;
            piece_len = 0;
        }
        size_t need = piece_len + (esc ? 7 : 0);
        if (n + need > cap) {
            fix->cut = 1;
            break;
        }
        if (esc) {
            memcpy(out + n, "_x005F_", 7);
            n += 7;
        }
        memcpy(out + n, piece, piece_len);
        n += piece_len;
        if (k == 0)
            fix->replaced++;
        p += k ? k : 1;
    }
    out[n] = '\0';
    return out;
}

/* -------------------------------------------------------------- places */

char *writer_cell_name(uint32_t row, uint16_t col, char *buf, size_t n)
{
    char letters[8];
    int k = 0;
    unsigned long c = (unsigned long)col + 1;
    while (c > 0) {
        c--;
        letters[k++] = (char)('A' + c % 26);
        c /= 26;
    }
    char name[8];
    for (int i = 0; i < k; i++)
        name[i] = letters[k - 1 - i];
    name[k] = '\0';
    if (n > 0)
        snprintf(buf, n, "%s%llu", name, (unsigned long long)row + 1);
    return buf;
}

/* "results.xlsx[Estimates]!B7" for messages and warnings. */
static void cell_place(const writer_sheet *s, uint32_t row, uint16_t col,
                       char *buf, size_t n)
{
    char cell[24];
    writer_cell_name(row, col, cell, sizeof cell);
    snprintf(buf, n, "%s[%s]!%s", s->w->base, s->name, cell);
}

static void warn(writer *w, const char *where, const char *what)
{
    /* A warning that cannot be stored is lost, not fatal: the cell itself
     * was written correctly. */
    if (w->warnings != NULL)
        (void)error_warn(w->warnings, where, "%s", what);
}

/* ------------------------------------------------------------- failures */

/* Records the first failure of a cell call and returns its status. */
static rf_status fail_cell(writer_sheet *s, uint32_t row, uint16_t col,
                           rf_status st, const char *fmt, const char *arg)
{
    writer *w = s->w;
    if (w->first.status == RF_OK) {
        char where[ERROR_WHERE_MAX];
        cell_place(s, row, col, where, sizeof where);
        error_set(&w->first, st, where, fmt, arg);
    }
    return w->first.status;
}

/* Maps a libxlsxwriter error from a cell call. */
static rf_status cell_error(writer_sheet *s, uint32_t row, uint16_t col,
                            lxw_error e)
{
    if (e == LXW_ERROR_MEMORY_MALLOC_FAILED)
        return fail_cell(s, row, col, RF_ENOMEM, "%s", "out of memory");
    if (e == LXW_ERROR_WORKSHEET_INDEX_OUT_OF_RANGE)
        return fail_cell(s, row, col, RF_ESYSTEM,
                         "internal error: cell written out of row order "
                         "or outside the sheet (%s)", lxw_strerror(e));
    return fail_cell(s, row, col, RF_ESYSTEM,
                     "could not write the cell: %s", lxw_strerror(e));
}

/* Checks the place before libxlsxwriter sees it. Rows must come in
 * increasing order (constant-memory mode); that is a mistake in the
 * caller, reported rather than asserted so that it is testable and a
 * release build cannot write a silently wrong sheet. */
static rf_status check_cell(writer_sheet *s, uint32_t row, uint16_t col)
{
    if (s->w->first.status != RF_OK)
        return s->w->first.status;
    if (row >= LXW_ROW_MAX || col >= LXW_COL_MAX) {
        char msg[128];
        snprintf(msg, sizeof msg, "%d rows x %d columns", LXW_ROW_MAX,
                 LXW_COL_MAX);
        return fail_cell(s, row, col, RF_EINPUT,
                         "a sheet holds at most %s", msg);
    }
    if ((int64_t)row < s->row)
        return fail_cell(s, row, col, RF_ESYSTEM, "%s",
                         "internal error: row written after a later row "
                         "(rows must be written in increasing order)");
    s->row = row;
    return RF_OK;
}

static lxw_format *format_of(const writer *w, writer_format f)
{
    return (f > WFMT_NONE && f < WFMT_COUNT_) ? w->fmt[f] : NULL;
}

rf_status writer_status(const writer *w, rf_error *err)
{
    if (w->first.status != RF_OK && err != NULL)
        *err = w->first;
    return w->first.status;
}

void writer_set_warnings(writer *w, rf_warnings *warnings)
{
    w->warnings = warnings;
}

void writer_set_created(writer *w, time_t created)
{
    w->created = created;
}

/* ------------------------------------------------------- writer_is_ours */

typedef struct mark_parse {
    XML_Parser p;
    int depth;
    int in_mark;            /* inside <property name="rowfit"> */
    int in_value;           /* inside its <vt:lpwstr> */
    size_t value_len;
    int found;
    int refused;
} mark_parse;

static void XMLCALL mark_start(void *data, const XML_Char *name,
                               const XML_Char **atts)
{
    mark_parse *m = data;
    m->depth++;
    if (m->depth == 2 && strcmp(name, NS_CUSTOM " property") == 0) {
        for (size_t i = 0; atts[i] != NULL; i += 2)
            if (strcmp(atts[i], "name") == 0
                && strcmp(atts[i + 1], MARK_NAME) == 0)
                m->in_mark = 1;
    } else if (m->depth == 3 && m->in_mark
               && strcmp(name, NS_VTYPES " lpwstr") == 0) {
        m->in_value = 1;
    }
}

static void XMLCALL mark_end(void *data, const XML_Char *name)
{
    mark_parse *m = data;
    (void)name;
    if (m->depth == 3 && m->in_value) {
        m->in_value = 0;
        if (m->value_len > 0 && m->value_len <= MARK_VALUE_MAX)
            m->found = 1;
    } else if (m->depth == 2) {
        m->in_mark = 0;
    }
    m->depth--;
}

static void XMLCALL mark_text(void *data, const XML_Char *s, int len)
{
    mark_parse *m = data;
    (void)s;
    if (m->in_value && len > 0)
        m->value_len += (size_t)len;
}

/* A DOCTYPE has no place in a document part; refusing it rules out entity
 * tricks cheaply (libraries.md A4). */
static void XMLCALL mark_doctype(void *data, const XML_Char *name,
                                 const XML_Char *sysid, const XML_Char *pubid,
                                 int has_internal)
{
    mark_parse *m = data;
    (void)name, (void)sysid, (void)pubid, (void)has_internal;
    m->refused = 1;
    XML_StopParser(m->p, XML_FALSE);
}

/* Streams docProps/custom.xml of the open zip through expat. */
static int custom_has_mark(unzFile uf)
{
    if (unzLocateFile(uf, "docProps/custom.xml", 1) != UNZ_OK)
        return 0;
    unz_file_info64 info;
    if (unzGetCurrentFileInfo64(uf, &info, NULL, 0, NULL, 0, NULL, 0)
        != UNZ_OK)
        return 0;
    /* minizip stops at the declared size (libraries.md A4), so checking it
     * first bounds the whole read. */
    if (info.uncompressed_size > CUSTOM_XML_MAX)
        return 0;
    if (unzOpenCurrentFile(uf) != UNZ_OK)
        return 0;

    mark_parse m = {0};
    m.p = XML_ParserCreateNS(NULL, ' ');
    int ok = m.p != NULL;
    if (ok) {
        XML_SetUserData(m.p, &m);
        XML_SetElementHandler(m.p, mark_start, mark_end);
        XML_SetCharacterDataHandler(m.p, mark_text);
        XML_SetStartDoctypeDeclHandler(m.p, mark_doctype);
    }
    while (ok) {
        enum { CHUNK = 16384 };
        void *buf = XML_GetBuffer(m.p, CHUNK);
        if (buf == NULL) {
            ok = 0;
            break;
        }
        int n = unzReadCurrentFile(uf, buf, CHUNK);
        if (n < 0) {
            ok = 0;
            break;
        }
        if (XML_ParseBuffer(m.p, n, n == 0) != XML_STATUS_OK || m.refused) {
            ok = 0;
            break;
        }
        if (n == 0)
            break;
    }
    /* The CRC is checked at close: a damaged part is not ours either. */
    if (unzCloseCurrentFile(uf) != UNZ_OK)
        ok = 0;
    if (m.p != NULL)
        XML_ParserFree(m.p);
    return ok && m.found;
}

int writer_is_ours(const char *path)
{
    struct stat st;
    /* Only regular files: opening a FIFO for reading would block. */
    if (path == NULL || stat(path, &st) != 0 || !S_ISREG(st.st_mode))
        return 0;
    unzFile uf = unzOpen64(path);
    if (uf == NULL)
        return 0;
    int ours = custom_has_mark(uf);
    unzClose(uf);
    return ours;
}

/* ---------------------------------------------------------- open/close */

static int same_file(const char *a, const struct stat *sa, const char *b)
{
    if (strcmp(a, b) == 0)
        return 1;
    struct stat sb;
    return sa != NULL && stat(b, &sb) == 0 && sa->st_dev == sb.st_dev
        && sa->st_ino == sb.st_ino;
}

/* Creates an empty file with an unused name ".BASE.tmp-XXXXXX" in w->dir.
 * Not mkstemp: its mode 0600 would become the result's mode, while
 * open(O_CREAT|O_EXCL, 0666) lets the user's umask decide, as for any new
 * file. */
static rf_status make_tmp(writer *w, rf_error *err)
{
    static const char digits[] = "abcdefghijklmnopqrstuvwxyz0123456789";
    size_t dlen = strlen(w->dir), blen = strlen(w->base);
    if (blen > TMP_BASE_MAX)
        blen = TMP_BASE_MAX;
    size_t size = dlen + blen + 20;
    w->tmp = malloc(size);
    if (w->tmp == NULL)
        return error_nomem(err, w->path);
    struct timespec ts;
    clock_gettime(CLOCK_REALTIME, &ts);
    unsigned long long seed = (unsigned long long)ts.tv_nsec
        ^ ((unsigned long long)ts.tv_sec << 20)
        ^ ((unsigned long long)getpid() << 40) ^ (uintptr_t)w;
    for (int attempt = 0; attempt < TMP_TRIES; attempt++) {
        char suffix[7];
        /* A 64-bit LCG step (Knuth's MMIX constants) is enough to spread
         * names; O_EXCL, not the randomness, guarantees uniqueness. */
        seed = seed * 6364136223846793005ULL + 1442695040888963407ULL;
        unsigned long long r = seed >> 16;
        for (int i = 0; i < 6; i++) {
            suffix[i] = digits[r % 36];
            r /= 36;
        }
        suffix[6] = '\0';
        snprintf(w->tmp, size, "%s/.%.*s.tmp-%s", w->dir, (int)blen,
                 w->base, suffix);
        int fd = open(w->tmp, O_WRONLY | O_CREAT | O_EXCL | O_CLOEXEC, 0666);
        if (fd >= 0) {
            close(fd);
            return RF_OK;
        }
        if (errno != EEXIST)
            break;
    }
    int e = errno;
    free(w->tmp);
    w->tmp = NULL;
    return error_set(err, RF_ESYSTEM, w->path,
                     "cannot create a temporary file in %s: %s", w->dir,
                     strerror(e));
}

static rf_status make_formats(writer *w, rf_error *err)
{
    static const char *const num[WFMT_COUNT_] = {
        [WFMT_INTEGER] = "0",
        [WFMT_FIXED2] = "#,##0.00",
        [WFMT_FIXED4] = "0.0000",
        [WFMT_SIG] = "General",
        [WFMT_SCI] = "0.000E+00",
        [WFMT_PVALUE] = "0.0000",
        [WFMT_PERCENT] = "0.0%",
        [WFMT_DATE] = "yyyy-mm-dd",
    };
    for (int f = WFMT_NONE + 1; f < WFMT_COUNT_; f++) {
        lxw_format *x = workbook_add_format(w->wb);
        if (x == NULL)
            return error_nomem(err, w->path);
        if (num[f] != NULL)
            format_set_num_format(x, num[f]);
        if (f == WFMT_WRAP) {
            format_set_text_wrap(x);
            format_set_align(x, LXW_ALIGN_VERTICAL_TOP);
        }
        if (f == WFMT_BOLD)
            format_set_bold(x);
        w->fmt[f] = x;
    }
    w->header_fmt = workbook_add_format(w->wb);
    if (w->header_fmt == NULL)
        return error_nomem(err, w->path);
    format_set_bold(w->header_fmt);
    format_set_bottom(w->header_fmt, LXW_BORDER_THIN);
    return RF_OK;
}

/* Frees the workbook without writing it. lxw_workbook_free does not close
 * the per-sheet temporary stream of constant-memory mode (seen: one file
 * descriptor left open per sheet), so that is closed here first. */
static void drop_workbook(writer *w)
{
    if (w->wb == NULL)
        return;
    for (size_t i = 0; i < w->n_sheets; i++) {
        lxw_worksheet *ws = w->sheets[i]->ws;
        if (ws != NULL && ws->optimize_tmpfile != NULL) {
            fclose(ws->optimize_tmpfile);
            ws->optimize_tmpfile = NULL;
        }
    }
    lxw_workbook_free(w->wb);
    w->wb = NULL;
}

static void writer_free(writer *w)
{
    if (w == NULL)
        return;
    drop_workbook(w);
    if (w->tmp != NULL)
        unlink(w->tmp);
    for (size_t i = 0; i < w->n_sheets; i++) {
        free(w->sheets[i]->name);
        free(w->sheets[i]);
    }
    free(w->sheets);
    free(w->tmp);
    free(w->path);
    free(w->dir);
    free(w->creator);
    if (w->cloc != (locale_t)0)
        freelocale(w->cloc);
    free(w);
}

rf_status writer_check(const char *path, int force,
                       const char *const *inputs, size_t n_inputs,
                       rf_error *err)
{
    if (path == NULL || *path == '\0')
        return error_set(err, RF_EINPUT, "", "no output path given");
    size_t plen = strlen(path);
    if (path[plen - 1] == '/')
        return error_set(err, RF_EINPUT, path, "the output path is a folder");

    struct stat st;
    int exists = stat(path, &st) == 0;
    for (size_t i = 0; i < n_inputs; i++)
        if (inputs[i] != NULL && same_file(path, exists ? &st : NULL,
                                           inputs[i]))
            return error_set(err, RF_EINPUT, path,
                             "would replace the input file %s; choose "
                             "another output path", inputs[i]);
    if (exists && !S_ISREG(st.st_mode))
        return error_set(err, RF_EINPUT, path,
                         "exists and is not a regular file");
    if (exists && !force && !writer_is_ours(path))
        return error_set(err, RF_EINPUT, path,
                         "%s exists and was not written by rowfit; use "
                         "--force to replace it", path);
    /* A folder that is not there is the user's mistake, not the system's */
    const char *slash = strrchr(path, '/');
    if (slash != NULL && slash != path) {
        char *dir = strndup(path, (size_t)(slash - path));
        if (dir == NULL)
            return error_nomem(err, path);
        struct stat ds;
        int ok = stat(dir, &ds) == 0 && S_ISDIR(ds.st_mode);
        rf_status r = ok ? RF_OK
                         : error_set(err, RF_EINPUT, path,
                                     "the folder '%s' does not exist", dir);
        free(dir);
        if (r != RF_OK)
            return r;
    }
    return RF_OK;
}

rf_status writer_open(const char *path, int force,
                      const char *const *inputs, size_t n_inputs,
                      const char *creator, writer **out, rf_error *err)
{
    *out = NULL;
    rf_status chk = writer_check(path, force, inputs, n_inputs, err);
    if (chk != RF_OK)
        return chk;

    writer *w = calloc(1, sizeof *w);
    if (w == NULL)
        return error_nomem(err, path);
    w->path = strdup(path);
    w->creator = strdup(creator != NULL ? creator : MARK_NAME);
    const char *slash = strrchr(path, '/');
    w->dir = slash == NULL ? strdup(".")
           : slash == path ? strdup("/")
           : strndup(path, (size_t)(slash - path));
    w->cloc = newlocale(LC_ALL_MASK, "C", (locale_t)0);
    if (w->path == NULL || w->creator == NULL || w->dir == NULL
        || w->cloc == (locale_t)0) {
        writer_free(w);
        return error_nomem(err, path);
    }
    w->base = slash == NULL ? w->path : w->path + (slash - path) + 1;

    rf_status s = make_tmp(w, err);
    if (s != RF_OK) {
        writer_free(w);
        return s;
    }
    lxw_workbook_options opt = {
        .constant_memory = LXW_TRUE,
        .tmpdir = w->dir,
        .use_zip64 = LXW_TRUE,
    };
    locale_t old = uselocale(w->cloc);
    w->wb = workbook_new_opt(w->tmp, &opt);
    s = w->wb == NULL ? error_nomem(err, path) : make_formats(w, err);
    uselocale(old);
    if (s != RF_OK) {
        writer_free(w);
        return s;
    }
    *out = w;
    return RF_OK;
}

/* Counts characters of valid UTF-8, or returns -1 on invalid bytes. */
static long utf8_chars(const char *s)
{
    long n = 0;
    while (*s) {
        size_t k = utf8_len((const unsigned char *)s);
        if (k == 0)
            return -1;
        s += k;
        n++;
    }
    return n;
}

static int ascii_casecmp(const char *a, const char *b)
{
    for (;; a++, b++) {
        int x = (*a >= 'A' && *a <= 'Z') ? *a + 32 : (unsigned char)*a;
        int y = (*b >= 'A' && *b <= 'Z') ? *b + 32 : (unsigned char)*b;
        if (x != y || x == 0)
            return x - y;
    }
}

writer_sheet *writer_add_sheet(writer *w, const char *name, rf_error *err)
{
    const char *where = w->base;
    long chars = name != NULL ? utf8_chars(name) : -1;
    const char *bad = NULL;
    if (name == NULL || chars == 0)
        bad = "is empty";
    else if (chars < 0)
        bad = "is not valid UTF-8";
    else if (chars > LXW_SHEETNAME_MAX)
        bad = "is longer than 31 characters";
    else if (strpbrk(name, "[]:*?/\\") != NULL)
        bad = "contains one of [ ] : * ? / \\";
    else if (name[0] == '\'' || name[strlen(name) - 1] == '\'')
        bad = "starts or ends with an apostrophe";
    else if (ascii_casecmp(name, "History") == 0)
        /* Reserved by spreadsheet programs for change tracking (from
         * memory). */
        bad = "is reserved";
    for (size_t i = 0; bad == NULL && i < w->n_sheets; i++)
        if (ascii_casecmp(name, w->sheets[i]->name) == 0)
            bad = "is already used by another sheet";
    if (bad != NULL) {
        error_set(err, RF_EINPUT, where, "sheet name '%s' %s",
                  name != NULL ? name : "", bad);
        return NULL;
    }

    if (w->n_sheets == w->cap_sheets) {
        size_t cap = w->cap_sheets ? 2 * w->cap_sheets : 8;
        writer_sheet **sheets = realloc(w->sheets, cap * sizeof *sheets);
        if (sheets == NULL) {
            error_nomem(err, where);
            return NULL;
        }
        w->sheets = sheets;
        w->cap_sheets = cap;
    }
    writer_sheet *s = calloc(1, sizeof *s);
    char *copy = strdup(name);
    if (s == NULL || copy == NULL) {
        free(s);
        free(copy);
        error_nomem(err, where);
        return NULL;
    }
    s->w = w;
    s->name = copy;
    s->row = -1;

    locale_t old = uselocale(w->cloc);
    /* Our checks are stricter than the library's, so this cannot print its
     * [WARNING]; it guards against a rule we did not know of. */
    lxw_error e = workbook_validate_sheet_name(w->wb, name);
    if (e == LXW_NO_ERROR)
        s->ws = workbook_add_worksheet(w->wb, name);
    uselocale(old);
    if (e != LXW_NO_ERROR || s->ws == NULL) {
        if (e != LXW_NO_ERROR)
            error_set(err, RF_EINPUT, where, "sheet name '%s': %s", name,
                      lxw_strerror(e));
        else
            /* In constant-memory mode a sheet needs a temporary file. */
            error_set(err, RF_ESYSTEM, where,
                      "cannot add sheet '%s': no memory or no temporary "
                      "file in %s", name, w->dir);
        free(copy);
        free(s);
        return NULL;
    }
    w->sheets[w->n_sheets++] = s;
    return s;
}

rf_status writer_column(writer_sheet *s, uint16_t col, double width,
                        writer_format fmt)
{
    writer *w = s->w;
    if (w->first.status != RF_OK)
        return w->first.status;
    if (col >= LXW_COL_MAX)
        return check_cell(s, 0, col);
    /* 255 characters is the widest column (common practice). */
    if (!(width >= 0.0))
        width = 0.0;
    if (width > 255.0)
        width = 255.0;
    locale_t old = uselocale(w->cloc);
    lxw_error e = worksheet_set_column(s->ws, col, col, width,
                                       format_of(w, fmt));
    uselocale(old);
    return e == LXW_NO_ERROR ? RF_OK : cell_error(s, 0, col, e);
}

/* Writes text that has been checked as a cell's place. */
static rf_status put_text(writer_sheet *s, uint32_t row, uint16_t col,
                          const char *text, lxw_format *f)
{
    writer *w = s->w;
    text_fix fix;
    char *clean = clean_text(text, 1, CELL_TEXT_MAX, &fix);
    if (clean == NULL)
        return fail_cell(s, row, col, RF_ENOMEM, "%s", "out of memory");
    if (fix.replaced > 0 || fix.cut) {
        char where[ERROR_WHERE_MAX];
        cell_place(s, row, col, where, sizeof where);
        if (fix.replaced > 0)
            warn(w, where, "text is not valid UTF-8; bad bytes were "
                           "replaced with U+FFFD");
        if (fix.cut)
            warn(w, where, "text longer than a cell holds (32,767 bytes) "
                           "was cut");
    }
    locale_t old = uselocale(w->cloc);
    /* A string cell, never a formula, whatever its first character. */
    lxw_error e = *clean != '\0'
                ? worksheet_write_string(s->ws, row, col, clean, f)
                : worksheet_write_blank(s->ws, row, col, f);
    uselocale(old);
    if (clean != text)
        free(clean);
    return e == LXW_NO_ERROR ? RF_OK : cell_error(s, row, col, e);
}

rf_status writer_header(writer_sheet *s, const char *const *names, size_t n,
                        uint32_t last_row)
{
    writer *w = s->w;
    if (n == 0)
        return RF_OK;
    if (n > LXW_COL_MAX)
        return check_cell(s, 0, LXW_COL_MAX);
    rf_status st = check_cell(s, 0, 0);
    for (size_t i = 0; st == RF_OK && i < n; i++)
        st = put_text(s, 0, (uint16_t)i, names[i] ? names[i] : "",
                      w->header_fmt);
    if (st != RF_OK)
        return st;
    if (last_row >= LXW_ROW_MAX)
        last_row = LXW_ROW_MAX - 1;
    locale_t old = uselocale(w->cloc);
    worksheet_freeze_panes(s->ws, 1, 0);
    lxw_error e = worksheet_autofilter(s->ws, 0, 0, last_row,
                                       (lxw_col_t)(n - 1));
    uselocale(old);
    return e == LXW_NO_ERROR ? RF_OK : cell_error(s, 0, 0, e);
}

rf_status writer_number(writer_sheet *s, uint32_t row, uint16_t col,
                        double v, writer_format fmt, int *wrote_blank)
{
    if (wrote_blank != NULL)
        *wrote_blank = 0;
    rf_status st = check_cell(s, row, col);
    if (st != RF_OK)
        return st;
    writer *w = s->w;
    lxw_format *f = format_of(w, fmt);
    locale_t old = uselocale(w->cloc);
    lxw_error e;
    if (isfinite(v)) {
        /* -0.0 would be written "-0"; a spreadsheet has no negative zero. */
        e = worksheet_write_number(s->ws, row, col, v + 0.0, f);
    } else {
        /* libxlsxwriter would write NAN/INF, which is not a valid cell. */
        e = worksheet_write_blank(s->ws, row, col, f);
        if (wrote_blank != NULL)
            *wrote_blank = 1;
    }
    uselocale(old);
    return e == LXW_NO_ERROR ? RF_OK : cell_error(s, row, col, e);
}

rf_status writer_text(writer_sheet *s, uint32_t row, uint16_t col,
                      const char *text, writer_format fmt)
{
    rf_status st = check_cell(s, row, col);
    if (st != RF_OK)
        return st;
    return put_text(s, row, col, text != NULL ? text : "",
                    format_of(s->w, fmt));
}

rf_status writer_blank(writer_sheet *s, uint32_t row, uint16_t col,
                       writer_format fmt)
{
    rf_status st = check_cell(s, row, col);
    if (st != RF_OK)
        return st;
    writer *w = s->w;
    locale_t old = uselocale(w->cloc);
    lxw_error e = worksheet_write_blank(s->ws, row, col, format_of(w, fmt));
    uselocale(old);
    return e == LXW_NO_ERROR ? RF_OK : cell_error(s, row, col, e);
}

rf_status writer_scatter(writer_sheet *s, uint32_t row, uint16_t col,
                         const char *title, const char *x_name,
                         const char *x_range, const char *y_name,
                         const char *y_range)
{
    /* A chart floats over the sheet: it is not a cell, so it may go
     * beside rows already written. */
    if (s->w->first.status != RF_OK)
        return s->w->first.status;
    if (row >= LXW_ROW_MAX || col >= LXW_COL_MAX)
        return fail_cell(s, row, col, RF_EINPUT, "%s",
                         "a chart placed outside the sheet");
    writer *w = s->w;
    locale_t old = uselocale(w->cloc);
    lxw_error e = LXW_ERROR_MEMORY_MALLOC_FAILED;
    lxw_chart *ch = workbook_add_chart(w->wb, LXW_CHART_SCATTER);
    lxw_chart_series *se = ch ? chart_add_series(ch, x_range, y_range) : NULL;
    if (se) {
        chart_series_set_marker_type(se, LXW_CHART_MARKER_CIRCLE);
        chart_series_set_marker_size(se, 3);
        chart_title_set_name(ch, title);
        chart_axis_set_name(ch->x_axis, x_name);
        chart_axis_set_name(ch->y_axis, y_name);
        /* labels below the plot, not on a zero line crossing its middle */
        chart_axis_set_label_position(ch->x_axis,
                                      LXW_CHART_AXIS_LABEL_POSITION_LOW);
        chart_legend_set_position(ch, LXW_CHART_LEGEND_NONE);
        e = worksheet_insert_chart(s->ws, row, col, ch);
    }
    uselocale(old);
    return e == LXW_NO_ERROR ? RF_OK : cell_error(s, row, col, e);
}

/* A formula cell with a cached number (text == NULL) or cached text. */
static rf_status formula_cell(writer_sheet *s, uint32_t row, uint16_t col,
                              const char *formula, double cached,
                              const char *text, writer_format fmt)
{
    rf_status st = check_cell(s, row, col);
    if (st != RF_OK)
        return st;
    writer *w = s->w;
    if (formula == NULL)
        formula = "";
    if (*formula == '=')
        formula++;
    if (*formula == '\0')
        return fail_cell(s, row, col, RF_ESYSTEM, "%s",
                         "internal error: empty formula");
    /* Formulas are built by the program, but may quote column names from
     * the input: keep the file valid XML whatever they hold. No "_x"
     * escaping here, which would change the formula's text. */
    text_fix fix, tfix = { 0, 0 };
    char *clean = clean_text(formula, 0, CELL_TEXT_MAX, &fix);
    if (clean == NULL)
        return fail_cell(s, row, col, RF_ENOMEM, "%s", "out of memory");
    char *ctext = text ? clean_text(text, 1, CELL_TEXT_MAX, &tfix) : NULL;
    if (text && ctext == NULL) {
        if (clean != formula)
            free(clean);
        return fail_cell(s, row, col, RF_ENOMEM, "%s", "out of memory");
    }
    lxw_format *f = format_of(w, fmt);
    locale_t old = uselocale(w->cloc);
    /* An empty string result is "no cached value": a plain
     * worksheet_write_formula would cache 0, which a reader that does not
     * recalculate would show as a real zero. */
    lxw_error e = text ? worksheet_write_formula_str(s->ws, row, col, clean,
                                                      f, ctext)
        : isfinite(cached)
        ? worksheet_write_formula_num(s->ws, row, col, clean, f,
                                      cached + 0.0)
        : worksheet_write_formula_str(s->ws, row, col, clean, f, "");
    uselocale(old);
    if (clean != formula)
        free(clean);
    if (ctext != text)
        free(ctext);
    if (e == LXW_NO_ERROR && (fix.replaced > 0 || fix.cut || tfix.cut
                              || tfix.replaced > 0))
        return fail_cell(s, row, col, RF_ESYSTEM, "%s",
                         "internal error: formula or its text is not valid "
                         "UTF-8 or is too long");
    return e == LXW_NO_ERROR ? RF_OK : cell_error(s, row, col, e);
}

rf_status writer_formula(writer_sheet *s, uint32_t row, uint16_t col,
                         const char *formula, double cached,
                         writer_format fmt)
{
    return formula_cell(s, row, col, formula, cached, NULL, fmt);
}

rf_status writer_formula_text(writer_sheet *s, uint32_t row, uint16_t col,
                              const char *formula, const char *cached,
                              writer_format fmt)
{
    return formula_cell(s, row, col, formula, 0, cached ? cached : "", fmt);
}

/* Forces what was written to tmp or to the folder onto the disk, so a
 * crash after the rename cannot leave an empty or missing result. */
static int sync_path(const char *p, int flags)
{
    int fd = open(p, flags | O_CLOEXEC);
    if (fd < 0)
        return -1;
    int r = fsync(fd);
    /* Some file systems cannot sync a folder; that is not a failed write. */
    if (r != 0 && (flags & O_DIRECTORY) && (errno == EINVAL
                                            || errno == EBADF))
        r = 0;
    int e = errno;
    close(fd);
    errno = e;
    return r;
}

rf_status writer_commit(writer *w, rf_error *err)
{
    if (w == NULL)
        return error_set(err, RF_ESYSTEM, "", "internal error: no writer");
    if (w->first.status != RF_OK) {
        rf_status s = writer_status(w, err);
        writer_free(w);
        return s;
    }

    /* libxlsxwriter prints to stderr when it cannot create its output;
     * checking first keeps that case (the folder went away) quiet. */
    struct stat st;
    if (stat(w->tmp, &st) != 0) {
        rf_status s = error_set(err, RF_ESYSTEM, w->path,
                                "cannot write the result: the temporary "
                                "file %s is gone: %s", w->tmp,
                                strerror(errno));
        writer_free(w);
        return s;
    }

    lxw_doc_properties props = {
        .title = (char *)"rowfit results",
        .author = w->creator,
        .comments = (char *)"Written by rowfit; numbers are stored at "
                            "full precision, display formats round them.",
        .created = w->created,
    };
    locale_t old = uselocale(w->cloc);
    lxw_error e = workbook_set_properties(w->wb, &props);
    if (e == LXW_NO_ERROR)
        e = workbook_set_custom_property_string(w->wb, MARK_NAME,
                                                w->creator);
    if (e != LXW_NO_ERROR) {
        uselocale(old);
        writer_free(w);
        return e == LXW_ERROR_MEMORY_MALLOC_FAILED
            ? error_nomem(err, "")
            : error_set(err, RF_ESYSTEM, "", "cannot set the document "
                        "properties: %s", lxw_strerror(e));
    }
    int saved_errno = 0;
    errno = 0;
    e = workbook_close(w->wb);
    saved_errno = errno;
    w->wb = NULL;           /* workbook_close frees it in every case */
    uselocale(old);
    if (e != LXW_NO_ERROR) {
        rf_status s = e == LXW_ERROR_MEMORY_MALLOC_FAILED
            ? error_nomem(err, w->path)
            : error_set(err, RF_ESYSTEM, w->path, "cannot write the "
                        "result: %s%s%s", lxw_strerror(e),
                        saved_errno ? ": " : "",
                        saved_errno ? strerror(saved_errno) : "");
        writer_free(w);
        return s;
    }
    if (sync_path(w->tmp, O_RDONLY) != 0 || rename(w->tmp, w->path) != 0) {
        rf_status s = error_set(err, RF_ESYSTEM, w->path,
                                "cannot write the result: %s",
                                strerror(errno));
        writer_free(w);
        return s;
    }
    free(w->tmp);
    w->tmp = NULL;          /* renamed: nothing left to remove */
    rf_status s = RF_OK;
    if (sync_path(w->dir, O_RDONLY | O_DIRECTORY) != 0)
        s = error_set(err, RF_ESYSTEM, w->path, "the result was written "
                      "but its folder could not be synced: %s",
                      strerror(errno));
    writer_free(w);
    return s;
}

void writer_abort(writer *w)
{
    writer_free(w);
}
