/*
 * xls.c: the .xls reader. FreeXL 1.0.6 opens the file, lists the sheets and
 * gives numbers and text (it decodes the shared strings and code pages).
 * What FreeXL gets wrong or drops is read here from the workbook stream:
 *  - FORMULA records are ignored by FreeXL (the cell reads as NULL, so a
 *    formula would look blank), and LibreOffice saves TRUE/FALSE and error
 *    constants as formulas too (seen in tests/data/xls-types.xls);
 *  - BOOLERR cells come back as INT 0/1, an error as 1, indistinguishable
 *    from numbers;
 *  - dates come back as text made from the serial, and that text is wrong
 *    for serials 0 and below (1900-01-01), for 2958465 (9999-11-01) and
 *    rounds 23:59:59.9 up to "24:00:00" (all seen with FreeXL 1.0.6).
 * So the scan collects, for the chosen sheet, every formula's cached
 * result, every BOOLERR cell, and the raw serial of every number whose
 * format is a date or time. The scan is its own small compound-file and
 * BIFF record reader, bounded at every step against crafted input: record
 * layouts from [MS-CFB] (compound file) and [MS-XLS] (BIFF8 records:
 * FORMULA 2.4.127, STRING 2.4.268, BOOLERR 2.4.24, RK 2.5.217, BErr
 * 2.5.97, FORMAT 2.4.126, XF 2.4.353, BoundSheet8 2.4.28, SST 2.4.265 and
 * XLUnicodeRichExtendedString 2.5.293, the last two from memory).
 * Not here: header rules (grid.c), other formats.
 */
#include "xls.h"

#include <errno.h>
#include <fcntl.h>
#include <freexl.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <sys/types.h>
#include <unistd.h>

/* The text an unreadable formula result shows, and why it is unreadable. */
#define XLS_FORMULA_UNREADABLE \
    "#FORMULA: this formula's saved result cannot be read from an .xls " \
    "file; save the file as .xlsx"
#define XLS_PASSWORD_MESSAGE \
    "password-protected: save it without a password, or as .xlsx"

/* [MS-CFB] 2.2: header fields and special sector numbers. */
#define CFB_ENDOFCHAIN 0xFFFFFFFEu
#define CFB_MAXREGSECT 0xFFFFFFFAu
#define CFB_DIR_ENTRY 128u
#define CFB_HEADER_DIFAT 109u
/* A chain longer than the file has sectors loops; a directory longer than
 * this holds no workbook anyone saved (common practice: a handful). */
#define CFB_DIR_ENTRIES_MAX 65536u

/* BIFF record types ([MS-XLS] 2.3). */
#define REC_FORMULA 0x0006u
#define REC_EOF 0x000Au
#define REC_FILEPASS 0x002Fu
#define REC_CONTINUE 0x003Cu
#define REC_BOUNDSHEET 0x0085u
#define REC_MULRK 0x00BDu
#define REC_XF 0x00E0u
#define REC_NUMBER 0x0203u
#define REC_BOOLERR 0x0205u
#define REC_STRING 0x0207u
#define REC_RK 0x027Eu
#define REC_FORMAT 0x041Eu
#define REC_BOF 0x0809u
#define REC_ARRAY 0x0221u
#define REC_TABLE 0x0236u
#define REC_SHRFMLA 0x04BCu
#define REC_DATEMODE 0x0022u
#define REC_SST 0x00FCu

/* BIFF cells stop at 65,536 rows and 256 columns; the longest cell text
 * is 32,767 characters ([MS-XLS] 2.5.293 XLUnicodeString). */
#define XLS_TEXT_MAX 32767u

static uint16_t u16(const unsigned char *p)
{
    return (uint16_t)(p[0] | (p[1] << 8));
}

static uint32_t u32(const unsigned char *p)
{
    return (uint32_t)p[0] | ((uint32_t)p[1] << 8) | ((uint32_t)p[2] << 16)
           | ((uint32_t)p[3] << 24);
}

static double f64(const unsigned char *p)
{
    uint64_t b = 0;
    double d;
    for (int i = 7; i >= 0; i--)
        b = (b << 8) | p[i];
    memcpy(&d, &b, sizeof d);
    return d;
}

/* ---- compound file ---------------------------------------------------- */

typedef struct cfb {
    int fd;
    uint64_t size;       /* file bytes */
    uint32_t ssz;        /* sector size: 512 or 4096 */
    uint32_t nsect;      /* whole sectors after the header */
    uint32_t *fat;
    uint32_t nfat;       /* FAT entries */
    unsigned char *dir;  /* the directory stream */
    uint32_t ndir;       /* directory entries */
    uint32_t minicut;
    uint32_t minifat_start;
} cfb;

/* Why a compound file could not be read (a bad structure, not errno). */
typedef enum cfb_fail {
    CFB_OK, CFB_NOTCFB, CFB_BAD, CFB_NOMEM, CFB_IO, CFB_BIG,
    CFB_NOBOOK, CFB_ENCRYPTED  /* found by scan_open, not the container */
} cfb_fail;

static cfb_fail read_at(const cfb *f, uint64_t off, void *buf, size_t n)
{
    unsigned char *p = buf;
    if (off > f->size || n > f->size - off)
        return CFB_BAD;
    while (n > 0) {
        ssize_t got = pread(f->fd, p, n, (off_t)off);
        if (got < 0 && errno == EINTR)
            continue;
        if (got <= 0)
            return CFB_IO;
        p += got;
        off += (uint64_t)got;
        n -= (size_t)got;
    }
    return CFB_OK;
}

/* Reads sector sid. Only whole sectors count: FreeXL refuses a file whose
 * chains reach a partial last sector too (and leaks memory doing so). */
static cfb_fail read_sector(const cfb *f, uint32_t sid, unsigned char *buf)
{
    if (sid >= f->nsect)
        return CFB_BAD;
    return read_at(f, ((uint64_t)sid + 1) * f->ssz, buf, f->ssz);
}

static void cfb_close(cfb *f)
{
    free(f->fat);
    free(f->dir);
    f->fat = NULL;
    f->dir = NULL;
}

/* Follows a chain through table `next` (n entries) from start; calls back
 * nothing: counts the sectors, failing on a loop or a bad number. */
static cfb_fail chain_len(const uint32_t *next, uint32_t n, uint32_t limit,
                          uint32_t start, uint32_t *len)
{
    uint32_t k = 0;
    for (uint32_t s = start; s != CFB_ENDOFCHAIN; s = next[s]) {
        if (s >= n || s > CFB_MAXREGSECT || k >= limit)
            return CFB_BAD;
        k++;
    }
    *len = k;
    return CFB_OK;
}

/* Reads a regular-sector stream of `want` bytes (all of the chain when
 * want is UINT64_MAX) into a new buffer. */
static cfb_fail read_chain(const cfb *f, uint32_t start, uint64_t want,
                           unsigned char **out, size_t *outlen)
{
    uint32_t k;
    cfb_fail r = chain_len(f->fat, f->nfat, f->nsect, start, &k);
    if (r != CFB_OK)
        return r;
    uint64_t cap = (uint64_t)k * f->ssz;
    if (want == UINT64_MAX)
        want = cap;
    if (want > cap)
        return CFB_BAD;
    if (want > XLS_STREAM_MAX)
        return CFB_BIG;
    unsigned char *buf = malloc(cap ? (size_t)cap : 1);
    if (!buf)
        return CFB_NOMEM;
    uint32_t i = 0;
    for (uint32_t s = start; s != CFB_ENDOFCHAIN; s = f->fat[s], i++) {
        r = read_sector(f, s, buf + (size_t)i * f->ssz);
        if (r != CFB_OK) {
            free(buf);
            return r;
        }
    }
    *out = buf;
    *outlen = (size_t)want;
    return CFB_OK;
}

static cfb_fail cfb_open(cfb *f, const char *path)
{
    unsigned char h[512];
    struct stat st;
    static const unsigned char sig[8] = {0xD0, 0xCF, 0x11, 0xE0,
                                         0xA1, 0xB1, 0x1A, 0xE1};
    memset(f, 0, sizeof *f);
    f->fd = open(path, O_RDONLY);
    if (f->fd < 0)
        return CFB_IO;
    if (fstat(f->fd, &st) != 0 || !S_ISREG(st.st_mode))
        return CFB_IO;
    f->size = (uint64_t)st.st_size;
    if (read_at(f, 0, h, sizeof h) != CFB_OK || memcmp(h, sig, 8) != 0)
        return CFB_NOTCFB;
    uint16_t shift = u16(h + 0x1E);
    if (shift != 9 && shift != 12)
        return CFB_BAD;
    f->ssz = 1u << shift;
    if (f->size <= f->ssz)
        return CFB_BAD;
    uint64_t ns = (f->size - f->ssz) / f->ssz;
    f->nsect = ns > CFB_MAXREGSECT ? CFB_MAXREGSECT : (uint32_t)ns;
    f->minicut = u32(h + 0x38);
    f->minifat_start = u32(h + 0x3C);

    /* FAT sector numbers: 109 in the header, the rest in the DIFAT chain. */
    uint32_t nfs = u32(h + 0x2C);
    if (nfs == 0 || nfs > f->nsect)
        return CFB_BAD;
    uint32_t per = f->ssz / 4;
    uint32_t *fsec = malloc((size_t)nfs * sizeof *fsec);
    unsigned char *sec = malloc(f->ssz);
    cfb_fail r = CFB_NOMEM;
    if (!fsec || !sec)
        goto done;
    uint32_t got = 0;
    for (uint32_t i = 0; i < CFB_HEADER_DIFAT && got < nfs; i++)
        fsec[got++] = u32(h + 0x4C + 4 * i);
    uint32_t dsid = u32(h + 0x44), hops = 0;
    while (got < nfs) {
        r = CFB_BAD;
        if (dsid >= f->nsect || hops++ > f->nsect)
            goto done;
        r = read_sector(f, dsid, sec);
        if (r != CFB_OK)
            goto done;
        for (uint32_t i = 0; i + 1 < per && got < nfs; i++)
            fsec[got++] = u32(sec + 4 * i);
        dsid = u32(sec + 4 * (per - 1));
    }
    f->nfat = nfs * per;
    f->fat = malloc((size_t)f->nfat * sizeof *f->fat);
    r = CFB_NOMEM;
    if (!f->fat)
        goto done;
    for (uint32_t i = 0; i < nfs; i++) {
        r = read_sector(f, fsec[i], sec);
        if (r != CFB_OK)
            goto done;
        for (uint32_t j = 0; j < per; j++)
            f->fat[(size_t)i * per + j] = u32(sec + 4 * j);
    }
    size_t dlen;
    r = read_chain(f, u32(h + 0x30), UINT64_MAX, &f->dir, &dlen);
    if (r != CFB_OK)
        goto done;
    f->ndir = (uint32_t)(dlen / CFB_DIR_ENTRY);
    if (f->ndir > CFB_DIR_ENTRIES_MAX)
        f->ndir = CFB_DIR_ENTRIES_MAX;
    r = f->ndir > 0 ? CFB_OK : CFB_BAD;
done:
    free(fsec);
    free(sec);
    return r;
}

/* The directory entry named `name` (ASCII, compared ignoring case), or -1. */
static long cfb_find(const cfb *f, const char *name)
{
    size_t n = strlen(name);
    for (uint32_t i = 0; i < f->ndir; i++) {
        const unsigned char *e = f->dir + (size_t)i * CFB_DIR_ENTRY;
        uint16_t nlen = u16(e + 0x40);
        if (e[0x42] == 0 || nlen != 2 * (n + 1))
            continue;
        size_t k = 0;
        for (; k < n; k++) {
            unsigned a = u16(e + 2 * k), b = (unsigned char)name[k];
            if (a >= 'a' && a <= 'z')
                a -= 'a' - 'A';
            if (b >= 'a' && b <= 'z')
                b -= 'a' - 'A';
            if (a != b)
                break;
        }
        if (k == n)
            return (long)i;
    }
    return -1;
}

/* Reads the stream of directory entry i into a new buffer. */
static cfb_fail cfb_stream(const cfb *f, uint32_t i, unsigned char **out,
                           size_t *len)
{
    const unsigned char *e = f->dir + (size_t)i * CFB_DIR_ENTRY;
    uint64_t size = u32(e + 0x78);
    if (f->ssz == 4096)  /* version 3 files may hold junk in the high half */
        size |= (uint64_t)u32(e + 0x7C) << 32;
    if (e[0x42] != 2)
        return CFB_BAD;
    if (size >= f->minicut)
        return read_chain(f, u32(e + 0x74), size, out, len);

    /* A small stream lives in the mini stream (the root entry's stream) in
     * 64-byte mini sectors chained through the mini FAT. */
    unsigned char *mini = NULL, *mfatb = NULL, *buf = NULL;
    size_t minilen, mfatlen;
    cfb_fail r = read_chain(f, u32(f->dir + 0x74), u32(f->dir + 0x78), &mini,
                            &minilen);
    if (r != CFB_OK)
        return r;
    r = read_chain(f, f->minifat_start, UINT64_MAX, &mfatb, &mfatlen);
    if (r != CFB_OK)
        goto done;
    uint32_t nm = (uint32_t)(mfatlen / 4), k;
    uint32_t *mfat = (uint32_t *)malloc(nm ? (size_t)nm * 4 : 4);
    r = CFB_NOMEM;
    if (!mfat)
        goto done;
    for (uint32_t j = 0; j < nm; j++)
        mfat[j] = u32(mfatb + 4 * (size_t)j);
    r = chain_len(mfat, nm, nm, u32(e + 0x74), &k);
    if (r == CFB_OK && size > (uint64_t)k * 64)
        r = CFB_BAD;
    if (r == CFB_OK && !(buf = malloc(size ? (size_t)size : 1)))
        r = CFB_NOMEM;
    if (r == CFB_OK) {
        size_t at = 0;
        for (uint32_t s = u32(e + 0x74); at < size; s = mfat[s]) {
            size_t take = size - at < 64 ? (size_t)(size - at) : 64;
            if ((uint64_t)s * 64 + take > minilen) {
                r = CFB_BAD;
                break;
            }
            memcpy(buf + at, mini + (size_t)s * 64, take);
            at += take;
        }
    }
    free(mfat);
    if (r == CFB_OK) {
        *out = buf;
        *len = (size_t)size;
        buf = NULL;
    }
done:
    free(buf);
    free(mini);
    free(mfatb);
    return r;
}

/* FreeXL 1.0.6 copies a directory entry's name into a 64-byte buffer by
 * the length the file states, and reads past it when that length is larger
 * (found by tests/fuzz/fuzz_xls.c: a stack over-read inside iconv). So
 * every entry's name must fit its 64 bytes before FreeXL sees the file. */
static cfb_fail cfb_names_fit(const cfb *f)
{
    for (uint32_t i = 0; i < f->ndir; i++) {
        const unsigned char *e = f->dir + (size_t)i * CFB_DIR_ENTRY;
        uint16_t nlen = u16(e + 0x40);
        if (e[0x42] > 5 || nlen > 64 || nlen % 2 != 0)
            return CFB_BAD;
    }
    return CFB_OK;
}

int xls_is_encrypted_ooxml(const char *path)
{
    cfb f;
    int yes = 0;
    if (cfb_open(&f, path) == CFB_OK)
        yes = cfb_find(&f, "EncryptionInfo") >= 0
              && cfb_find(&f, "EncryptedPackage") >= 0;
    cfb_close(&f);
    if (f.fd >= 0)
        close(f.fd);
    return yes;
}

/* ---- BIFF scan -------------------------------------------------------- */

typedef enum ent_kind {
    ENT_RAW,     /* a number in a date or time format: the exact serial */
    ENT_NUMBER,  /* formula results from here on, and BOOLERR cells */
    ENT_DATE,
    ENT_BOOL,
    ENT_ERROR,
    ENT_TEXT,
    ENT_BLANK,   /* a formula whose result is the empty string */
    ENT_UNREADABLE
} ent_kind;

typedef struct ent {
    uint32_t row;
    uint16_t col;
    uint8_t kind;
    double v;
    char *text;  /* ENT_TEXT (owned) */
} ent;

typedef struct scan {
    int biff8;          /* else BIFF5 */
    int filepass;
    int date1904;
    uint8_t *xfclass;   /* per XF: 0 general, 1 date, 2 time */
    size_t nxf, capxf;
    struct fmt { uint16_t id; uint8_t cls; } *fmts;
    size_t nfmt, capfmt;
    struct sheetpos { uint32_t pos; char *name; } *sheets;
    size_t nsheets, capsheets;
    ent *e;
    size_t n, cap;
} scan;

static void scan_free(scan *s)
{
    free(s->xfclass);
    free(s->fmts);
    for (size_t i = 0; i < s->nsheets; i++)
        free(s->sheets[i].name);
    free(s->sheets);
    for (size_t i = 0; i < s->n; i++)
        free(s->e[i].text);
    free(s->e);
    memset(s, 0, sizeof *s);
}

/* Grows a vector to hold one more item; 0 on no memory. */
static int grow(void **p, size_t *cap, size_t n, size_t size)
{
    if (n < *cap)
        return 1;
    size_t c = *cap ? *cap * 2 : 16;
    if (c > SIZE_MAX / size)
        return 0;
    void *q = realloc(*p, c * size);
    if (!q)
        return 0;
    *p = q;
    *cap = c;
    return 1;
}

/* Date or time class of a format code given as code units: y, d (and m
 * without h or s) make a date, h or s alone a time; quoted text, [...]
 * sections and characters escaped by \ _ * do not count (common practice;
 * the same rule the .xlsx reader applies, libraries.md). */
static uint8_t format_class(const unsigned char *p, size_t n, int wide)
{
    int date = 0, time = 0, month = 0, quote = 0, bracket = 0;
    for (size_t i = 0; i < n; i++) {
        unsigned c = wide ? u16(p + 2 * i) : p[i];
        if (quote) {
            quote = c != '"';
            continue;
        }
        if (bracket) {
            bracket = c != ']';
            continue;
        }
        if (c >= 'A' && c <= 'Z')
            c += 'a' - 'A';
        switch (c) {
        case '"': quote = 1; break;
        case '[': bracket = 1; break;
        case '\\': case '_': case '*': i++; break;
        case 'y': case 'd': date = 1; break;
        case 'h': case 's': time = 1; break;
        case 'm': month = 1; break;
        default: break;
        }
    }
    if (date || (month && !time))
        return 1;
    return time ? 2 : 0;
}

/* Built-in format ids that are dates (14-17, 22) and times (18-21, 45-47)
 * ([MS-XLS] 2.4.126 FORMAT, the built-in list; libraries.md). */
static uint8_t builtin_class(uint16_t id)
{
    if ((id >= 14 && id <= 17) || id == 22)
        return 1;
    if ((id >= 18 && id <= 21) || (id >= 45 && id <= 47))
        return 2;
    return 0;
}

static uint8_t xf_class(const scan *s, uint16_t xf)
{
    return xf < s->nxf ? s->xfclass[xf] : 0;
}

/* Appends UTF-8 for code point c to b (room for 4 bytes is the caller's). */
static size_t put_utf8(char *b, uint32_t c)
{
    if (c < 0x80) {
        b[0] = (char)c;
        return 1;
    }
    if (c < 0x800) {
        b[0] = (char)(0xC0 | (c >> 6));
        b[1] = (char)(0x80 | (c & 0x3F));
        return 2;
    }
    if (c < 0x10000) {
        b[0] = (char)(0xE0 | (c >> 12));
        b[1] = (char)(0x80 | ((c >> 6) & 0x3F));
        b[2] = (char)(0x80 | (c & 0x3F));
        return 3;
    }
    b[0] = (char)(0xF0 | (c >> 18));
    b[1] = (char)(0x80 | ((c >> 12) & 0x3F));
    b[2] = (char)(0x80 | ((c >> 6) & 0x3F));
    b[3] = (char)(0x80 | (c & 0x3F));
    return 4;
}

/* A string builder for BIFF8 text: 8-bit units are Latin-1, 16-bit units
 * UTF-16LE ([MS-XLS] 2.5.293). */
typedef struct sbuf {
    char *b;
    size_t n;
    uint32_t hi;  /* a pending high surrogate, or 0 */
} sbuf;

static void sbuf_unit(sbuf *s, uint32_t u)
{
    if (s->hi) {
        if (u >= 0xDC00 && u <= 0xDFFF) {
            s->n += put_utf8(s->b + s->n,
                             0x10000 + ((s->hi - 0xD800) << 10) + (u - 0xDC00));
            s->hi = 0;
            return;
        }
        s->n += put_utf8(s->b + s->n, 0xFFFD);
        s->hi = 0;
    }
    if (u >= 0xD800 && u <= 0xDBFF)
        s->hi = u;
    else if (u >= 0xDC00 && u <= 0xDFFF)
        s->n += put_utf8(s->b + s->n, 0xFFFD);
    else
        s->n += put_utf8(s->b + s->n, u);
}

/* Decodes cch characters of BIFF8 text starting at p (flags byte first),
 * continuing into CONTINUE records after the record that ends at `end`
 * (each begins with a new flags byte). *text is NULL when the text does
 * not fit (a cut-off record). Returns 0 on no memory. */
static int biff8_text(const unsigned char *p, const unsigned char *end,
                      const unsigned char *stream_end, uint32_t cch,
                      char **text)
{
    sbuf s = {malloc((size_t)cch * 4 + 4), 0, 0};
    *text = NULL;
    if (!s.b)
        return 0;
    uint32_t done = 0;
    int first = 1;
    while (done < cch) {
        if (!first) {  /* the next record must be a CONTINUE */
            if (stream_end - end < 4 || u16(end) != REC_CONTINUE
                || (size_t)(stream_end - end - 4) < u16(end + 2))
                goto cut;
            p = end + 4;
            end = p + u16(end + 2);
        }
        first = 0;
        if (p >= end)
            goto cut;
        int wide = *p++ & 1;
        while (done < cch && end - p >= (wide ? 2 : 1)) {
            sbuf_unit(&s, wide ? u16(p) : *p);
            p += wide ? 2 : 1;
            done++;
        }
    }
    if (s.hi)
        s.n += put_utf8(s.b + s.n, 0xFFFD);
    s.b[s.n] = '\0';
    *text = s.b;
    return 1;
cut:
    free(s.b);
    return 1;
}

static int add_ent(scan *s, uint32_t row, uint16_t col, ent_kind k, double v)
{
    if (!grow((void **)&s->e, &s->cap, s->n, sizeof *s->e))
        return 0;
    s->e[s->n++] = (ent){row, col, (uint8_t)k, v, NULL};
    return 1;
}

/* RK number ([MS-XLS] 2.5.217): a 30-bit integer or the top of a double,
 * optionally divided by 100. */
static double rk_value(uint32_t rk)
{
    double v;
    if (rk & 2) {
        int32_t i = (int32_t)(rk & ~3u);
        v = (double)(i / 4);
    } else {
        unsigned char b[8] = {0};
        uint32_t hi = rk & ~3u;
        b[4] = (unsigned char)hi;
        b[5] = (unsigned char)(hi >> 8);
        b[6] = (unsigned char)(hi >> 16);
        b[7] = (unsigned char)(hi >> 24);
        v = f64(b);
    }
    return (rk & 1) ? v / 100 : v;
}

static const char *berr_text(unsigned code)
{
    switch (code) {  /* [MS-XLS] 2.5.97 BErr */
    case 0x00: return "#NULL!";
    case 0x07: return "#DIV/0!";
    case 0x0F: return "#VALUE!";
    case 0x17: return "#REF!";
    case 0x1D: return "#NAME?";
    case 0x24: return "#NUM!";
    case 0x2A: return "#N/A";
    default: return "#ERROR";
    }
}

/* A sheet name from a BoundSheet8 record body (BIFF8: ShortXLUnicodeString;
 * BIFF5: bytes as they are). NULL on no memory; "" when cut off. */
static char *sheet_name(const scan *s, const unsigned char *p,
                        const unsigned char *end)
{
    char *t = NULL;
    if (end - p < 1)
        return strdup("");
    uint32_t cch = *p++;
    if (s->biff8) {
        if (!biff8_text(p, end, end, cch, &t))
            return NULL;
        return t ? t : strdup("");
    }
    if ((size_t)(end - p) < cch)
        return strdup("");
    t = malloc(cch + 1u);
    if (t) {
        memcpy(t, p, cch);
        t[cch] = '\0';
    }
    return t;
}

/* Reads the workbook globals: BIFF version, FILEPASS, DATEMODE, FORMAT, XF
 * and BOUNDSHEET records, up to the globals' EOF. Returns 0 on no memory,
 * -1 on a stream that is not a workbook, 1 on success. */
static int scan_globals(scan *s, const unsigned char *b, size_t len)
{
    if (len < 8 || u16(b) != REC_BOF || u16(b + 2) < 4)
        return -1;
    uint16_t vers = u16(b + 4);
    if (vers != 0x0600 && vers != 0x0500)
        return -1;
    s->biff8 = vers == 0x0600;
    size_t at = 0;
    while (len - at >= 4) {
        uint16_t type = u16(b + at), n = u16(b + at + 2);
        if (len - at - 4 < n)
            break;  /* cut off: what was read stands */
        const unsigned char *p = b + at + 4, *end = p + n;
        at += 4u + n;
        if (type == REC_EOF)
            break;
        if (type == REC_FILEPASS) {
            s->filepass = 1;
            break;  /* everything after it is encrypted */
        }
        if (type == REC_DATEMODE && n >= 2) {
            s->date1904 = u16(p) == 1;
        } else if (type == REC_FORMAT && n >= 3) {
            uint16_t id = u16(p);
            uint8_t cls;
            if (s->biff8 && n >= 5) {
                uint32_t cch = u16(p + 2);
                int wide = p[4] & 1;
                size_t room = (size_t)(end - p - 5) / (wide ? 2 : 1);
                cls = format_class(p + 5, cch < room ? cch : room, wide);
            } else {
                size_t cch = p[2], room = (size_t)(end - p - 3);
                cls = format_class(p + 3, cch < room ? cch : room, 0);
            }
            if (!grow((void **)&s->fmts, &s->capfmt, s->nfmt, sizeof *s->fmts))
                return 0;
            s->fmts[s->nfmt].id = id;
            s->fmts[s->nfmt++].cls = cls;
        } else if (type == REC_XF && n >= 4) {
            uint16_t id = u16(p + 2);
            uint8_t cls = builtin_class(id);
            for (size_t i = 0; i < s->nfmt; i++)
                if (s->fmts[i].id == id)
                    cls = s->fmts[i].cls;
            if (!grow((void **)&s->xfclass, &s->capxf, s->nxf, 1))
                return 0;
            s->xfclass[s->nxf++] = cls;
        } else if (type == REC_BOUNDSHEET && n >= 6) {
            if (!grow((void **)&s->sheets, &s->capsheets, s->nsheets,
                      sizeof *s->sheets))
                return 0;
            char *name = sheet_name(s, p + 6, end);
            if (!name)
                return 0;
            s->sheets[s->nsheets].pos = u32(p);
            s->sheets[s->nsheets++].name = name;
        }
    }
    return 1;
}

/* Collects the sheet's formula results, BOOLERR cells and date serials
 * from its substream at pos. Returns 0 on no memory, 1 otherwise (a
 * damaged substream ends the scan; what was read stands). */
static int scan_sheet(scan *s, const unsigned char *b, size_t len,
                      size_t pos)
{
    int depth = 0;
    long pending = -1;  /* the formula waiting for its STRING record */
    size_t at = pos;
    while (len - at >= 4 && at >= pos) {
        uint16_t type = u16(b + at), n = u16(b + at + 2);
        if (len - at - 4 < n)
            break;
        const unsigned char *p = b + at + 4, *end = p + n;
        at += 4u + n;
        if (type == REC_BOF) {
            depth++;
            continue;
        }
        if (depth == 0)
            break;  /* the substream must start with a BOF */
        if (type == REC_EOF) {
            if (--depth == 0)
                break;
            continue;
        }
        if (depth != 1)
            continue;  /* a chart embedded in the sheet */
        if (type == REC_STRING && pending >= 0) {
            ent *e = &s->e[pending];
            pending = -1;
            char *t = NULL;
            if (s->biff8 && n >= 3) {
                if (!biff8_text(p + 2, end, b + len, u16(p), &t))
                    return 0;
            } else if (!s->biff8 && n >= 2 && (size_t)(n - 2) >= u16(p)) {
                size_t cch = u16(p);
                int ascii = 1;
                for (size_t i = 0; i < cch; i++)
                    ascii &= p[2 + i] < 0x80;
                /* BIFF5 text is in the file's code page: only ASCII is
                 * certain without a converter. */
                if (ascii && (t = malloc(cch + 1)) == NULL)
                    return 0;
                if (t) {
                    memcpy(t, p + 2, cch);
                    t[cch] = '\0';
                }
            }
            if (t) {
                e->kind = ENT_TEXT;
                e->text = t;
            }
            continue;
        }
        if (type == REC_FORMULA && n >= 14) {
            uint32_t row = u16(p);
            uint16_t col = u16(p + 2), xf = u16(p + 4);
            const unsigned char *v = p + 6;
            ent_kind k;
            double d = 0;
            if (u16(v + 6) != 0xFFFF) {
                d = f64(v);
                k = xf_class(s, xf) == 1 ? ENT_DATE : ENT_NUMBER;
            } else if (v[0] == 0) {
                k = ENT_UNREADABLE;  /* until its STRING record comes */
            } else if (v[0] == 1) {
                k = ENT_BOOL;
                d = v[2] != 0;
            } else if (v[0] == 2) {
                k = ENT_ERROR;
                d = v[2];
            } else if (v[0] == 3) {
                k = ENT_BLANK;
            } else {
                k = ENT_UNREADABLE;
            }
            if (!add_ent(s, row, col, k, d))
                return 0;
            pending = (v[0] == 0 && u16(v + 6) == 0xFFFF) ? (long)s->n - 1
                                                           : -1;
            continue;
        }
        /* STRING follows its FORMULA, maybe after the formula's shared,
         * array or table record ([MS-XLS] 2.1.7.20.3 CELLTABLE). */
        if (type == REC_CONTINUE || type == REC_SHRFMLA || type == REC_ARRAY
            || type == REC_TABLE)
            continue;
        pending = -1;
        if (type == REC_BOOLERR && n >= 8) {
            if (!add_ent(s, u16(p), u16(p + 2), p[7] ? ENT_ERROR : ENT_BOOL,
                         p[6]))
                return 0;
        } else if (type == REC_NUMBER && n >= 14) {
            if (xf_class(s, u16(p + 4)) && !add_ent(s, u16(p), u16(p + 2),
                                                    ENT_RAW, f64(p + 6)))
                return 0;
        } else if (type == REC_RK && n >= 10) {
            if (xf_class(s, u16(p + 4))
                && !add_ent(s, u16(p), u16(p + 2), ENT_RAW,
                            rk_value(u32(p + 6))))
                return 0;
        } else if (type == REC_MULRK && n >= 6) {
            uint32_t row = u16(p);
            uint16_t col = u16(p + 2);
            for (size_t i = 4; i + 6 <= (size_t)n - 2; i += 6, col++)
                if (xf_class(s, u16(p + i))
                    && !add_ent(s, row, col, ENT_RAW, rk_value(u32(p + i + 2))))
                    return 0;
        }
    }
    return 1;
}

static int ent_cmp(const void *a, const void *b)
{
    const ent *x = a, *y = b;
    if (x->row != y->row)
        return x->row < y->row ? -1 : 1;
    if (x->col != y->col)
        return x->col < y->col ? -1 : 1;
    return 0;
}

/* FreeXL 1.0.6 sizes a sheet's cell array from its DIMENSIONS record and
 * writes cells into it without checking: a cell record outside those
 * bounds corrupts its heap (found by tests/fuzz/fuzz_xls.c: a bad free in
 * freexl_open). So every cell record of every sheet is checked against the
 * sheet's DIMENSIONS ([MS-XLS] 2.4.90) before FreeXL opens the file, and a
 * second DIMENSIONS record in a sheet (which no program writes, and which
 * the fuzzer used to the same effect) is refused. Returns 1 when all fit. */
static int cells_fit(const scan *s, const unsigned char *b, size_t len,
                     size_t pos)
{
    int depth = 0, dims = 0;
    uint32_t rmax = 0, cmax = 0;  /* one past the last row and column */
    size_t at = pos;
    while (len - at >= 4) {
        uint16_t type = u16(b + at), n = u16(b + at + 2);
        if (len - at - 4 < n)
            return 1;  /* cut off: FreeXL stops reading there too */
        const unsigned char *p = b + at + 4;
        at += 4u + n;
        if (type == REC_BOF) {
            depth++;
            continue;
        }
        if (depth == 0)
            return 1;
        if (type == REC_EOF) {
            if (--depth == 0)
                return 1;
            continue;
        }
        if (depth != 1)
            continue;
        if (type == 0x0200u) {  /* DIMENSIONS: one per sheet, before cells */
            if (dims)
                return 0;
            if (s->biff8 && n >= 12) {
                rmax = u32(p + 4);
                cmax = u16(p + 10);
            } else if (n >= 8) {
                rmax = u16(p + 2);
                cmax = u16(p + 6);
            } else {
                return 0;
            }
            dims = 1;
            continue;
        }
        uint32_t row, last;
        switch (type) {
        case 0x0001: case 0x0002: case 0x0003: case 0x0004: case 0x0005:
        case REC_FORMULA: case 0x00FD: case 0x00D6: case 0x0201:
        case 0x0204: case REC_NUMBER: case REC_BOOLERR: case REC_RK:
            if (n < 4)
                return 0;
            row = u16(p);
            last = u16(p + 2);
            break;
        case REC_MULRK: case 0x00BE:  /* MULBLANK */
            if (n < 6)
                return 0;
            row = u16(p);
            last = u16(p + n - 2);
            if (last < u16(p + 2))
                return 0;
            break;
        default:
            continue;
        }
        if (!dims || row >= rmax || last >= cmax)
            return 0;
    }
    return 1;
}

/* The longest BIFF8 record body ([MS-XLS] 2.1.4); FreeXL 1.0.6 copies a
 * record by its stated length, past the end of the stream when the record
 * runs past it (a heap over-read found by tests/fuzz/fuzz_xls.c). */
#define XLS_RECORD_MAX 8224u

/* 1 when every record of the stream lies inside it and within the longest
 * record size; a stream may end in fewer than 4 stray bytes. */
static int records_fit(const unsigned char *b, size_t len)
{
    size_t at = 0;
    while (len - at >= 4) {
        uint16_t n = u16(b + at + 2);
        if (n > XLS_RECORD_MAX || len - at - 4 < n)
            return 0;
        at += 4u + n;
    }
    return 1;
}

/* 1 when the text of a record lies inside it: cch characters, counted at
 * p (2 bytes, or 1 when short), then in BIFF8 a flags byte (bit 0: two
 * bytes a character), [MS-XLS] 2.5.293-2.5.294. */
static int text_fits(const unsigned char *p, const unsigned char *end,
                     int biff8, int short_count)
{
    size_t head = short_count ? 1 : 2;
    if ((size_t)(end - p) < head + (biff8 ? 1u : 0u))
        return 0;
    size_t cch = short_count ? p[0] : u16(p);
    size_t unit = biff8 && (p[head] & 1) ? 2 : 1;
    return cch * unit <= (size_t)(end - p) - head - (biff8 ? 1u : 0u);
}

/* FreeXL 1.0.6 copies the text of FORMAT, BOUNDSHEET and LABEL records by
 * the stated character count, past the record (a heap over-read found by
 * tests/fuzz/fuzz_xls.c). Returns 1 when every such text fits. Call after
 * records_fit. */
static int texts_fit(const unsigned char *b, size_t len, int biff8)
{
    size_t at = 0;
    while (len - at >= 4) {
        uint16_t type = u16(b + at), n = u16(b + at + 2);
        const unsigned char *p = b + at + 4, *end = p + n;
        at += 4u + n;
        int ok = 1;
        if (type == REC_FORMAT)
            ok = n >= 2 && text_fits(p + 2, end, biff8, !biff8);
        else if (type == REC_BOUNDSHEET)
            ok = n >= 6 && text_fits(p + 6, end, biff8, 1);
        else if (type == 0x0204u)  /* LABEL */
            ok = n >= 6 && text_fits(p + 6, end, biff8, 0);
        if (!ok)
            return 0;
    }
    return 1;
}

/* A reader over an SST record and the CONTINUE records after it: `at` is
 * the next byte, `end` the end of the current record's body. */
typedef struct sst_cur {
    const unsigned char *b;
    size_t len, at, end;
} sst_cur;

/* Moves to the body of the next record when the current one is used up;
 * 0 when that record is not a CONTINUE (the string runs past its SST). */
static int sst_next(sst_cur *c)
{
    while (c->at == c->end) {
        if (c->len - c->end < 4 || u16(c->b + c->end) != REC_CONTINUE)
            return 0;
        c->at = c->end + 4;
        c->end = c->at + u16(c->b + c->end + 2);
    }
    return 1;
}

/* Reads (out non-NULL) or skips n bytes that may span record boundaries
 * with nothing between them: a string's header, its formatting runs and
 * its extended data. */
static int sst_take(sst_cur *c, unsigned char *out, size_t n)
{
    while (n > 0) {
        if (!sst_next(c))
            return 0;
        size_t k = c->end - c->at < n ? c->end - c->at : n;
        if (out) {
            memcpy(out, c->b + c->at, k);
            out += k;
        }
        c->at += k;
        n -= k;
    }
    return 1;
}

/* FreeXL 1.0.6 reads a shared string by its declared character count,
 * runs and extended size without checking them against the record: past
 * the heap buffer on a crafted file (found by tests/fuzz/fuzz_xls.c,
 * tests/fuzz/crashes-xls/freexl-open-overread.xls). So every string of
 * every SST is walked first. Layout from [MS-XLS] 2.4.265 SST (cstTotal
 * and cstUnique, 4 bytes each, then cstUnique strings), 2.5.293
 * XLUnicodeRichExtendedString (cch 2 bytes; flags 1 byte: fHighByte 0x01,
 * fExtSt 0x04, fRichSt 0x08; cRun 2 bytes if rich; cbExtRst 4 bytes if
 * ext; the characters; 4 bytes a run; the ext data) and 2.4.58 Continue
 * (character data that goes on in the next record starts there with a new
 * flags byte; the other parts just go on); section numbers from memory.
 * Returns 1 when every string fits. Call after records_fit. */
static int sst_fits(const unsigned char *b, size_t len)
{
    size_t at = 0;
    while (len - at >= 4) {
        uint16_t type = u16(b + at), n = u16(b + at + 2);
        sst_cur c = {b, len, at + 4, at + 4 + n};
        at += 4u + n;
        if (type != REC_SST)
            continue;
        unsigned char h[8];
        if (!sst_take(&c, h, 8))
            return 0;
        /* each string takes 3 bytes at least, so a huge count ends soon */
        for (uint32_t left = u32(h + 4); left > 0; left--) {
            unsigned char sh[3], x[4];
            if (!sst_take(&c, sh, 3))
                return 0;
            size_t cch = u16(sh), runs = 0, ext = 0;
            if (sh[2] & 0x08) {
                if (!sst_take(&c, x, 2))
                    return 0;
                runs = u16(x);
            }
            if (sh[2] & 0x04) {
                if (!sst_take(&c, x, 4))
                    return 0;
                ext = u32(x);
            }
            size_t unit = sh[2] & 0x01 ? 2 : 1;
            while (cch > 0) {
                if (c.at == c.end) {  /* goes on after a new flags byte */
                    if (!sst_next(&c))
                        return 0;
                    unit = c.b[c.at++] & 0x01 ? 2 : 1;
                    continue;
                }
                size_t room = (c.end - c.at) / unit;
                if (room == 0)
                    return 0;  /* half a character before the record end */
                size_t k = room < cch ? room : cch;
                c.at += k * unit;
                cch -= k;
            }
            if (!sst_take(&c, NULL, runs * 4) || !sst_take(&c, NULL, ext))
                return 0;
        }
    }
    return 1;
}

/* Opens the compound file, checks what FreeXL cannot be trusted with
 * (names longer than their field, records, texts or shared strings past
 * their end, cells outside their sheet's size), and reads the workbook
 * stream ("Workbook" in BIFF8, "Book" in BIFF5) and its globals into s.
 * *stream is the caller's to free, also on error. */
static rf_status scan_open(const char *path, const char *name, scan *s,
                           unsigned char **stream, size_t *len, rf_error *err)
{
    cfb f;
    int encrypted = 0;
    cfb_fail r = cfb_open(&f, path);
    *stream = NULL;
    *len = 0;
    if (r == CFB_OK)
        r = cfb_names_fit(&f);
    if (r == CFB_OK) {
        long i = cfb_find(&f, "Workbook");
        if (i < 0)
            i = cfb_find(&f, "Book");
        encrypted = cfb_find(&f, "EncryptionInfo") >= 0
                    && cfb_find(&f, "EncryptedPackage") >= 0;
        if (i >= 0)
            r = cfb_stream(&f, (uint32_t)i, stream, len);
        else
            r = encrypted ? CFB_ENCRYPTED : CFB_NOBOOK;
    }
    cfb_close(&f);
    if (f.fd >= 0)
        close(f.fd);
    switch (r) {
    case CFB_ENCRYPTED:
        return error_set(err, RF_EINPUT, name,
                         "an encrypted (password-protected) .xlsx workbook: "
                         "save it without a password");
    case CFB_NOBOOK:
        return error_set(err, RF_EINPUT, name,
                         "a compound file without a workbook inside: not an "
                         ".xls workbook");
    case CFB_OK: break;
    case CFB_NOMEM: return error_nomem(err, name);
    case CFB_IO:
        return error_set(err, RF_ESYSTEM, name, "cannot open or read the file");
    case CFB_BIG:
        return error_set(err, RF_EINPUT, name,
                         "the workbook is larger than %zu MB, too large for "
                         "this reader; save it as .xlsx",
                         XLS_STREAM_MAX >> 20);
    case CFB_NOTCFB:
        return error_set(err, RF_EINPUT, name,
                         "not an .xls workbook (no compound-file header)");
    case CFB_BAD:
        return error_set(err, RF_EINPUT, name,
                         "the .xls file is damaged or truncated: its "
                         "compound-file structure is broken; open it and "
                         "save it again, or as .xlsx");
    }
    int g = scan_globals(s, *stream, *len);
    if (g == 0)
        return error_nomem(err, name);
    if (g < 0)
        return error_set(err, RF_EINPUT, name,
                         "the .xls file is damaged: its workbook stream does "
                         "not start like a BIFF5 or BIFF8 (.xls) workbook");
    if (s->filepass)
        return error_set(err, RF_EINPUT, name, XLS_PASSWORD_MESSAGE);
    if (!records_fit(*stream, *len) || !texts_fit(*stream, *len, s->biff8))
        return error_set(err, RF_EINPUT, name,
                         "the .xls file is damaged or truncated: a record "
                         "or its text runs past its end; open it and save "
                         "it again, or as .xlsx");
    if (!sst_fits(*stream, *len))
        return error_set(err, RF_EINPUT, name,
                         "damaged .xls: a shared string runs past its "
                         "record; save the file again or as .xlsx");
    for (size_t i = 0; i < s->nsheets; i++)
        if (s->sheets[i].pos < *len
            && !cells_fit(s, *stream, *len, s->sheets[i].pos))
            return error_set(err, RF_EINPUT, name,
                             "the .xls file is damaged: sheet '%s' has a "
                             "cell outside the size the sheet records; open "
                             "it and save it again, or as .xlsx",
                             s->sheets[i].name);
    return RF_OK;
}

/* ---- FreeXL ----------------------------------------------------------- */

static rf_status freexl_fail(int code, const char *name, rf_error *err)
{
    switch (code) {
    case FREEXL_FILE_NOT_FOUND:
        return error_set(err, RF_ESYSTEM, name, "cannot open the file");
    case FREEXL_INSUFFICIENT_MEMORY:
        return error_set(err, RF_ENOMEM, name,
                         "out of memory reading the .xls file (the reader "
                         "holds a whole sheet in memory and refuses sheets "
                         "over 256 MB of cells); save it as .xlsx");
    case FREEXL_INVALID_CFBF_HEADER:
    case FREEXL_CFBF_INVALID_SIGNATURE:
        return error_set(err, RF_EINPUT, name,
                         "not an .xls workbook (no compound-file header)");
    case FREEXL_BIFF_WORKBOOK_NOT_FOUND:
        return error_set(err, RF_EINPUT, name,
                         "a compound file without a workbook inside: not an "
                         ".xls workbook");
    case FREEXL_UNSUPPORTED_CHARSET:
    case FREEXL_INVALID_CHARACTER:
        return error_set(err, RF_EINPUT, name,
                         "the .xls file's text is in a code page this reader "
                         "cannot convert; save it as .xlsx");
    default:
        return error_set(err, RF_EINPUT, name,
                         "the .xls file is damaged or truncated (reader code "
                         "%d); open it and save it again, or as .xlsx",
                         code);
    }
}

/* Checks and scans the file (scan_open), then opens it with FreeXL. On
 * success the caller owns *h (freexl_close), s and *stream. */
static rf_status xl_open(const char *path, const char *name, const void **h,
                         unsigned *nsheets, scan *s, unsigned char **stream,
                         size_t *len, rf_error *err)
{
    unsigned info = 0;
    *h = NULL;
    rf_status st = scan_open(path, name, s, stream, len, err);
    if (st != RF_OK)
        return st;
    int rc = freexl_open(path, h);
    if (rc != FREEXL_OK) {
        freexl_close(*h);  /* FreeXL frees its half-built handle here */
        *h = NULL;
        return freexl_fail(rc, name, err);
    }
    if (freexl_get_info(*h, FREEXL_BIFF_PASSWORD, &info) == FREEXL_OK
        && info == FREEXL_BIFF_OBFUSCATED)
        return error_set(err, RF_EINPUT, name, XLS_PASSWORD_MESSAGE);
    if ((rc = freexl_get_info(*h, FREEXL_BIFF_SHEET_COUNT, &info)) != FREEXL_OK)
        return freexl_fail(rc, name, err);
    if (info == 0)
        return error_set(err, RF_EINPUT, name, "the workbook has no sheets");
    *nsheets = info;
    return RF_OK;
}

/* The sheet names (pointers into FreeXL's handle). */
static rf_status xl_names(const void *h, unsigned n, const char *name,
                          const char ***out, rf_error *err)
{
    const char **v = calloc(n, sizeof *v);
    if (!v)
        return error_nomem(err, name);
    for (unsigned i = 0; i < n; i++) {
        int rc = freexl_get_worksheet_name(h, (unsigned short)i, &v[i]);
        if (rc != FREEXL_OK || !v[i]) {
            free(v);
            return freexl_fail(rc != FREEXL_OK ? rc : FREEXL_CRAFTED_FILE,
                               name, err);
        }
    }
    *out = v;
    return RF_OK;
}

rf_status xls_sheets(const char *path, const char *name, grid_sheet **out,
                     size_t *n, rf_error *err)
{
    const void *h;
    unsigned ns = 0;
    const char **names = NULL;
    grid_sheet *v = NULL;
    unsigned char *stream = NULL;
    size_t len;
    scan s;
    memset(&s, 0, sizeof s);
    *out = NULL;
    *n = 0;
    rf_status st = xl_open(path, name, &h, &ns, &s, &stream, &len, err);
    free(stream);
    scan_free(&s);
    if (st == RF_OK)
        st = xl_names(h, ns, name, &names, err);
    if (st == RF_OK && !(v = calloc(ns, sizeof *v)))
        st = error_nomem(err, name);
    for (unsigned i = 0; st == RF_OK && i < ns; i++) {
        unsigned rows = 0;
        unsigned short cols = 0;
        int rc = freexl_select_active_worksheet(h, (unsigned short)i);
        if (rc == FREEXL_OK)
            rc = freexl_worksheet_dimensions(h, &rows, &cols);
        if (rc != FREEXL_OK) {
            st = freexl_fail(rc, name, err);
        } else if (!(v[i].name = strdup(names[i]))) {
            st = error_nomem(err, name);
        } else {
            v[i].rows = rows;
            v[i].cols = cols;
        }
    }
    free(names);
    freexl_close(h);
    if (st != RF_OK) {
        grid_sheets_free(v, ns);
        return st;
    }
    *out = v;
    *n = ns;
    return RF_OK;
}

/* Parses FreeXL's 'YYYY-MM-DD', 'YYYY-MM-DD HH:MM:SS' or 'HH:MM:SS' into a
 * 1900-system serial (time alone: the fraction of a day). -1 if odd. Only
 * a fallback: the scan's exact serial is used when it has one. */
static double text_serial(const char *s, int has_date, int has_time)
{
    int y = 0, mo = 0, d = 0, hh = 0, mi = 0, ss = 0, k = 0;
    double day = 0;
    if (has_date) {
        if (sscanf(s, "%4d-%2d-%2d%n", &y, &mo, &d, &k) != 3)
            return -1;
        day = table_date_serial(y, mo, d);
        if (day < 0)
            return -1;
        s += k;
        while (*s == ' ')
            s++;
    }
    if (has_time) {
        if (sscanf(s, "%2d:%2d:%2d", &hh, &mi, &ss) != 3)
            return -1;
        day += (hh * 3600.0 + mi * 60.0 + ss) / 86400.0;
    }
    return day;
}

/* Hands one cell to the grid. e is the scan's entry for it, or NULL. */
static rf_status put_cell(grid *g, uint32_t row, uint16_t col,
                          const FreeXL_CellValue *v, const ent *e,
                          double shift, rf_error *err)
{
    if (e && e->kind != ENT_RAW) {
        switch ((ent_kind)e->kind) {
        case ENT_NUMBER: return grid_number(g, row, col, e->v, err);
        case ENT_DATE: return grid_date(g, row, col, e->v + shift, err);
        case ENT_BOOL: return grid_bool(g, row, col, e->v != 0, err);
        case ENT_ERROR: {
            const char *t = berr_text((unsigned)e->v);
            return grid_error(g, row, col, t, strlen(t), err);
        }
        case ENT_TEXT:
            return grid_text(g, row, col, e->text, strlen(e->text), err);
        case ENT_BLANK: return RF_OK;
        default:
            return grid_error(g, row, col, XLS_FORMULA_UNREADABLE,
                              strlen(XLS_FORMULA_UNREADABLE), err);
        }
    }
    switch (v->type) {
    case FREEXL_CELL_INT:
        return grid_number(g, row, col, v->value.int_value, err);
    case FREEXL_CELL_DOUBLE:
        return grid_number(g, row, col, v->value.double_value, err);
    case FREEXL_CELL_TEXT:
    case FREEXL_CELL_SST_TEXT:
        if (!v->value.text_value)
            return RF_OK;
        return grid_text(g, row, col, v->value.text_value,
                         strlen(v->value.text_value), err);
    case FREEXL_CELL_DATE:
    case FREEXL_CELL_DATETIME:
    case FREEXL_CELL_TIME: {
        int is_time = v->type == FREEXL_CELL_TIME;
        double d;
        if (e) {
            d = e->v + (is_time ? 0 : shift);
        } else {
            d = v->value.text_value
                    ? text_serial(v->value.text_value, !is_time,
                                  v->type != FREEXL_CELL_DATE)
                    : -1;
            if (d < 0) {  /* FreeXL's text is all there is: keep it */
                const char *t = v->value.text_value ? v->value.text_value : "";
                return grid_text(g, row, col, t, strlen(t), err);
            }
        }
        if (is_time || d < 1 || d >= 2958466)
            return grid_number(g, row, col, d, err);
        return grid_date(g, row, col, d, err);
    }
    default:
        /* a date serial FreeXL did not report: still a number */
        return e ? grid_number(g, row, col, e->v, err) : RF_OK;
    }
}

rf_status xls_read(const char *path, const char *name, const char *sheet,
                   uint32_t header, table **out, rf_warnings *warn,
                   rf_error *err)
{
    const void *h;
    unsigned ns = 0;
    const char **names = NULL;
    unsigned char *stream = NULL;
    size_t len = 0, pick = 0;
    grid *g = NULL;
    scan s;
    memset(&s, 0, sizeof s);
    *out = NULL;

    rf_status st = xl_open(path, name, &h, &ns, &s, &stream, &len, err);
    if (st == RF_OK)
        st = xl_names(h, ns, name, &names, err);
    if (st == RF_OK)
        st = grid_pick_sheet(name, sheet, names, ns, &pick, err);
    if (st != RF_OK)
        goto done;

    /* The scan's sheet: by name, else by position when the counts agree. */
    size_t si = s.nsheets;
    for (size_t i = 0; i < s.nsheets; i++)
        if (strcmp(s.sheets[i].name, names[pick]) == 0) {
            si = i;
            break;
        }
    if (si == s.nsheets && s.nsheets == ns)
        si = pick;
    if (si == s.nsheets || s.sheets[si].pos >= len) {
        st = error_set(err, RF_EINPUT, name,
                       "sheet '%s': its formula cells cannot be located in "
                       "the .xls file; save the file as .xlsx", names[pick]);
        goto done;
    }
    if (!scan_sheet(&s, stream, len, s.sheets[si].pos)) {
        st = error_nomem(err, name);
        goto done;
    }
    free(stream);
    stream = NULL;
    if (s.n > 0)
        qsort(s.e, s.n, sizeof *s.e, ent_cmp);

    int rc = freexl_select_active_worksheet(h, (unsigned short)pick);
    unsigned rows = 0;
    unsigned short cols = 0;
    if (rc == FREEXL_OK)
        rc = freexl_worksheet_dimensions(h, &rows, &cols);
    if (rc != FREEXL_OK) {
        st = freexl_fail(rc, name, err);
        goto done;
    }
    /* Formula cells may lie outside the size FreeXL reports. */
    uint32_t nrows = rows, ncols = cols;
    for (size_t i = 0; i < s.n; i++) {
        if (s.e[i].row >= nrows)
            nrows = s.e[i].row + 1;
        if (s.e[i].col >= ncols)
            ncols = (uint32_t)s.e[i].col + 1;
    }
    g = grid_create(name, names[pick], header);
    if (!g) {
        st = error_nomem(err, name);
        goto done;
    }
    double shift = s.date1904 ? 1462 : 0;
    size_t k = 0;
    for (uint32_t r = 0; r < nrows && st == RF_OK; r++) {
        for (uint32_t c = 0; c < ncols && st == RF_OK; c++) {
            FreeXL_CellValue v;
            const ent *e = NULL;
            while (k < s.n && (s.e[k].row < r || (s.e[k].row == r
                                                  && s.e[k].col < c)))
                k++;
            if (k < s.n && s.e[k].row == r && s.e[k].col == c)
                e = &s.e[k];
            v.type = FREEXL_CELL_NULL;
            if (r < rows && c < cols) {
                rc = freexl_get_cell_value(h, r, (unsigned short)c, &v);
                if (rc != FREEXL_OK) {
                    st = freexl_fail(rc, name, err);
                    break;
                }
            }
            if (v.type != FREEXL_CELL_NULL || e)
                st = put_cell(g, r + 1, (uint16_t)c, &v, e, shift, err);
        }
    }
    if (st == RF_OK)
        st = grid_finish(g, out, warn, err);
done:
    grid_free(g);
    scan_free(&s);
    free(stream);
    free(names);
    freexl_close(h);
    return st;
}
