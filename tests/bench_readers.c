/*
 * bench_readers.c: `make bench` for the table readers, a benchmark and not a
 * test. Generates N rows x 10 columns of invented house sales as .csv and
 * .xlsx (libxlsxwriter, constant-memory mode), measures each format's
 * physical limit in the same run (CSV: read the bytes and count newlines;
 * .xlsx: inflate the sheet part with minizip and run expat over it with
 * empty handlers), then times each reader in a child process of its own and
 * prints rows/s next to the limit, and the reader's peak memory next to the
 * table's own size (rows x cols x 9 bytes + text). Built with -DHAVE_XLSX
 * when io/xlsx.c exists; without it only the CSV reader is timed.
 *
 *   bench_readers [--rows N] [--dir DIR] [--repeat N] [--keep]
 */
#include <errno.h>
#include <expat.h>
#include <minizip/unzip.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/resource.h>
#include <sys/stat.h>
#include <sys/wait.h>
#include <time.h>
#include <unistd.h>
#include <xlsxwriter.h>

#include "../io/csv.h"
#include "../io/table.h"
#ifdef HAVE_XLSX
#include "../io/xlsx.h"
#endif

#define SHEET_PART "xl/worksheets/sheet1.xml"  /* libxlsxwriter's name */
#define BLOCK (256 * 1024)

static const char *const DISTRICT[5] = {"Velderhook", "Quarrendip",
                                        "Mossgrindle", "Skellacombe",
                                        "Ambervask"};
static const char *const HEADER[10] = {
    "property_id", "sale_date", "living_area", "lot_area", "bedrooms",
    "bathrooms", "year_built", "garage", "district", "price"};

/* splitmix64 (S. Vigna, public domain): a fixed stream, so every run reads
 * the same data. */
static uint64_t next_u64(uint64_t *s)
{
    uint64_t z = (*s += UINT64_C(0x9E3779B97F4A7C15));
    z = (z ^ (z >> 30)) * UINT64_C(0xBF58476D1CE4E5B9);
    z = (z ^ (z >> 27)) * UINT64_C(0x94D049BB133111EB);
    return z ^ (z >> 31);
}

static long pick(uint64_t *s, long lo, long hi)
{
    return lo + (long)(next_u64(s) % (uint64_t)(hi - lo + 1));
}

typedef struct sale {
    char id[24];
    int y, m, d;
    double living, lot, bath, price;
    int bed, built, garage;
    const char *district;
} sale;

static void make_sale(uint64_t *s, long i, sale *h)
{
    snprintf(h->id, sizeof h->id, "S-%07ld", i + 1);
    h->y = 2025 + (int)(i * 2 / 1000000 % 2);
    h->m = (int)pick(s, 1, 12);
    h->d = (int)pick(s, 1, 28);
    h->living = (double)pick(s, 45, 320);
    h->lot = (double)pick(s, 0, 2400);
    h->bed = (int)pick(s, 1, 6);
    h->bath = (double)pick(s, 2, 8) / 2.0;
    h->built = (int)pick(s, 1890, 2024);
    h->garage = (int)pick(s, 0, 3);
    h->district = DISTRICT[pick(s, 0, 4)];
    h->price = (double)(60000 + 1450 * (long)h->living + 18 * (long)h->lot +
                        pick(s, -30000, 30000));
}

static int write_csv(const char *path, long rows)
{
    FILE *f = fopen(path, "w");
    if (f == NULL)
        return -1;
    for (int c = 0; c < 10; c++)
        fprintf(f, "%s%c", HEADER[c], c == 9 ? '\n' : ',');
    uint64_t s = 20260315;
    sale h;
    for (long i = 0; i < rows; i++) {
        make_sale(&s, i, &h);
        fprintf(f, "%s,%04d-%02d-%02d,%.0f,%.0f,%d,%.1f,%d,%d,%s,%.0f\n",
                h.id, h.y, h.m, h.d, h.living, h.lot, h.bed, h.bath, h.built,
                h.garage, h.district, h.price);
    }
    return fclose(f) == 0 ? 0 : -1;
}

static int write_xlsx(const char *path, const char *tmpdir, long rows)
{
    lxw_workbook_options o = {.constant_memory = LXW_TRUE,
                              .tmpdir = (char *)tmpdir};
    lxw_workbook *wb = workbook_new_opt(path, &o);
    if (wb == NULL)
        return -1;
    lxw_worksheet *ws = workbook_add_worksheet(wb, "Sales");
    lxw_format *date = workbook_add_format(wb);
    format_set_num_format(date, "yyyy-mm-dd");
    for (int c = 0; c < 10; c++)
        worksheet_write_string(ws, 0, (lxw_col_t)c, HEADER[c], NULL);
    uint64_t s = 20260315;
    sale h;
    for (long i = 0; i < rows; i++) {
        lxw_row_t r = (lxw_row_t)(i + 1);
        make_sale(&s, i, &h);
        worksheet_write_string(ws, r, 0, h.id, NULL);
        worksheet_write_number(ws, r, 1, table_date_serial(h.y, h.m, h.d),
                               date);
        worksheet_write_number(ws, r, 2, h.living, NULL);
        worksheet_write_number(ws, r, 3, h.lot, NULL);
        worksheet_write_number(ws, r, 4, h.bed, NULL);
        worksheet_write_number(ws, r, 5, h.bath, NULL);
        worksheet_write_number(ws, r, 6, h.built, NULL);
        worksheet_write_number(ws, r, 7, h.garage, NULL);
        worksheet_write_string(ws, r, 8, h.district, NULL);
        worksheet_write_number(ws, r, 9, h.price, NULL);
    }
    return workbook_close(wb) == LXW_NO_ERROR ? 0 : -1;
}

static double now(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + (double)ts.tv_nsec * 1e-9;
}

/* CPU time of this process: on a machine shared with other work the wall
 * time says more about the neighbours than about the reader. */
static double cpu(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_PROCESS_CPUTIME_ID, &ts);
    return (double)ts.tv_sec + (double)ts.tv_nsec * 1e-9;
}

typedef struct timing {
    double wall, cpu;
} timing;

/* ---- physical limits -------------------------------------------------- */

/* Reads the file and counts its newlines: no reader can beat this. */
static timing csv_limit(const char *path, long *lines)
{
    timing t = {-1, -1};
    FILE *f = fopen(path, "rb");
    char *buf = malloc(BLOCK);
    if (f == NULL || buf == NULL) {
        if (f != NULL)
            fclose(f);
        free(buf);
        return t;
    }
    double t0 = now(), c0 = cpu();
    long n = 0;
    size_t got;
    while ((got = fread(buf, 1, BLOCK, f)) > 0) {
        const char *p = buf, *end = buf + got;
        while ((p = memchr(p, '\n', (size_t)(end - p))) != NULL) {
            n++;
            p++;
        }
    }
    t.wall = now() - t0;
    t.cpu = cpu() - c0;
    fclose(f);
    free(buf);
    *lines = n;
    return t;
}

static void XMLCALL no_start(void *ud, const XML_Char *name,
                             const XML_Char **atts)
{
    (void)ud;
    (void)name;
    (void)atts;
}

static void XMLCALL no_end(void *ud, const XML_Char *name)
{
    (void)ud;
    (void)name;
}

static void XMLCALL no_text(void *ud, const XML_Char *s, int len)
{
    (void)ud;
    (void)s;
    (void)len;
}

/* Inflates the sheet part straight into expat's buffer and parses it with
 * handlers that do nothing (namespace-aware, as a reader's parser is).
 * *bytes gets the inflated size. */
static timing xlsx_limit(const char *path, unsigned long long *bytes)
{
    timing t = {-1, -1};
    unzFile z = unzOpen64(path);
    if (z == NULL)
        return t;
    XML_Parser p = NULL;
    if (unzLocateFile(z, SHEET_PART, 1) != UNZ_OK ||
        unzOpenCurrentFile(z) != UNZ_OK)
        goto done;
    double t0 = now(), c0 = cpu();
    p = XML_ParserCreateNS(NULL, '|');
    if (p == NULL)
        goto done;
    XML_SetElementHandler(p, no_start, no_end);
    XML_SetCharacterDataHandler(p, no_text);
    unsigned long long total = 0;
    for (;;) {
        void *buf = XML_GetBuffer(p, BLOCK);
        if (buf == NULL)
            goto done;
        int n = unzReadCurrentFile(z, buf, BLOCK);
        if (n < 0)
            goto done;
        total += (unsigned long long)n;
        if (XML_ParseBuffer(p, n, n == 0) != XML_STATUS_OK) {
            fprintf(stderr, "bench: %s: %s\n", SHEET_PART,
                    XML_ErrorString(XML_GetErrorCode(p)));
            goto done;
        }
        if (n == 0)
            break;
    }
    t.wall = now() - t0;
    t.cpu = cpu() - c0;
    *bytes = total;
done:
    if (p != NULL)
        XML_ParserFree(p);
    unzCloseCurrentFile(z);
    unzClose(z);
    return t;
}

/* ---- readers, each in a child process --------------------------------- */

typedef struct result {
    int ok;
    timing time;
    size_t rows, cols;
    unsigned long long text;  /* text bytes in the table, NULs included */
    double sum;               /* of every number and date, to compare */
    long maxrss_kb;
    char message[600];
} result;

enum { READ_CSV = 1, READ_XLSX };

static void run_reader(int which, const char *path, result *res)
{
    memset(res, 0, sizeof *res);
    table *t = NULL;
    rf_warnings warn = {0};
    rf_error err = {0};
    rf_status s = RF_EUSAGE;
    double t0 = now(), c0 = cpu();
    if (which == READ_CSV) {
        csv_options o = {0, 0};
        s = csv_read(path, path, &o, &t, &warn, &err);
    }
#ifdef HAVE_XLSX
    if (which == READ_XLSX)
        s = xlsx_read(path, path, NULL, 0, &t, &warn, &err);
#endif
    res->time.wall = now() - t0;
    res->time.cpu = cpu() - c0;
    if (s != RF_OK) {
        snprintf(res->message, sizeof res->message, "%.90s: %.500s",
                 err.where, err.message);
        return;
    }
    res->ok = 1;
    res->rows = table_rows(t);
    res->cols = table_cols(t);
    for (size_t c = 0; c < res->cols; c++)
        for (size_t r = 0; r < res->rows; r++) {
            const char *x = table_cell_text(t, r, c);
            if (x != NULL)
                res->text += strlen(x) + 1;
            else if (table_cell_type(t, r, c) != CELL_BLANK)
                res->sum += table_cell_number(t, r, c);
        }
    table_free(t);
    error_warnings_clear(&warn);
}

/* Runs the reader in a child so its peak memory is its own (the child
 * starts from this process's footprint, about a megabyte, which the peak
 * includes). */
static int in_child(int which, const char *path, result *res)
{
    int fd[2];
    if (pipe(fd) != 0)
        return -1;
    fflush(NULL);
    pid_t pid = fork();
    if (pid < 0)
        return -1;
    if (pid == 0) {
        close(fd[0]);
        run_reader(which, path, res);
        struct rusage ru;
        getrusage(RUSAGE_SELF, &ru);
        res->maxrss_kb = ru.ru_maxrss;
        ssize_t w = write(fd[1], res, sizeof *res);
        _exit(w == (ssize_t)sizeof *res ? 0 : 1);
    }
    close(fd[1]);
    ssize_t got = read(fd[0], res, sizeof *res);
    close(fd[0]);
    int st;
    waitpid(pid, &st, 0);
    if (got != (ssize_t)sizeof *res || !WIFEXITED(st) ||
        WEXITSTATUS(st) != 0) {
        memset(res, 0, sizeof *res);
        snprintf(res->message, sizeof res->message, "the reader crashed");
        return -1;
    }
    return 0;
}

static double mb(double bytes)
{
    return bytes / 1e6;
}

static void print_speed(const char *label, size_t rows, timing t)
{
    printf("  %-32s %10.0f rows/s %8.3f s wall; %10.0f rows/s %8.3f s CPU\n",
           label, (double)rows / t.wall, t.wall, (double)rows / t.cpu, t.cpu);
}

/* Times a reader (best of repeat runs, each in a child) and prints its
 * speed against the limit and its peak memory against the table's own
 * size. The first reader's table is the reference the others must match. */
static void report(const char *label, const char *path, int which, int repeat,
                   timing lim, long rows, result *ref)
{
    result best = {0}, res;
    for (int k = 0; k < repeat; k++) {
        in_child(which, path, &res);
        if (!res.ok) {
            printf("  %-32s failed: %s\n", label, res.message);
            return;
        }
        if (k == 0 || res.time.wall < best.time.wall)
            best = res;
    }
    double own = (double)best.rows * (double)best.cols * 9.0 +
                 (double)best.text;
    double peak = (double)best.maxrss_kb * 1024.0;
    print_speed(label, best.rows, best.time);
    printf("  %-32s %.2fx the limit's wall time, %.2fx its CPU time\n", "",
           best.time.wall / lim.wall, best.time.cpu / lim.cpu);
    printf("  %-32s peak memory %.1f MB = %.2fx the table's own %.1f MB "
           "(%zu x %zu x 9 B + %.1f MB text)\n", "", mb(peak), peak / own,
           mb(own), best.rows, best.cols, mb((double)best.text));
    if (best.rows != (size_t)rows || best.cols != 10)
        printf("  %-32s WRONG SHAPE: %zu x %zu, generated %ld x 10\n", "",
               best.rows, best.cols, rows);
    if (ref->ok && (best.text != ref->text || best.sum != ref->sum))
        printf("  %-32s WRONG CELLS: text bytes %llu, sum %.17g; the CSV "
               "gave %llu, %.17g\n", "", best.text, best.sum, ref->text,
               ref->sum);
    if (!ref->ok)
        *ref = best;
}

static long file_size(const char *path)
{
    struct stat st;
    return stat(path, &st) == 0 ? (long)st.st_size : -1;
}

int main(int argc, char **argv)
{
    long rows = 1000000;
    int repeat = 1, keep = 0;
    const char *dir_arg = NULL;
    for (int i = 1; i < argc; i++) {
        if (strcmp(argv[i], "--rows") == 0 && i + 1 < argc)
            rows = atol(argv[++i]);
        else if (strcmp(argv[i], "--repeat") == 0 && i + 1 < argc)
            repeat = atoi(argv[++i]);
        else if (strcmp(argv[i], "--dir") == 0 && i + 1 < argc)
            dir_arg = argv[++i];
        else if (strcmp(argv[i], "--keep") == 0)
            keep = 1;
        else {
            fprintf(stderr, "usage: bench_readers [--rows N] [--dir DIR] "
                            "[--repeat N] [--keep]\n");
            return 2;
        }
    }
    if (rows < 1 || rows > 1048575 || repeat < 1) {
        fprintf(stderr, "bench: --rows 1..1048575, --repeat 1 or more\n");
        return 2;
    }
    char dir[256], csv[300], xlsx[300];
    if (dir_arg != NULL) {
        snprintf(dir, sizeof dir, "%s", dir_arg);
        if (mkdir(dir, 0700) != 0 && errno != EEXIST) {
            perror(dir);
            return 1;
        }
    } else {
        snprintf(dir, sizeof dir, "/tmp/rowfit-bench-readers.XXXXXX");
        if (mkdtemp(dir) == NULL) {
            perror("mkdtemp");
            return 1;
        }
    }
    snprintf(csv, sizeof csv, "%s/house-sales.csv", dir);
    snprintf(xlsx, sizeof xlsx, "%s/house-sales.xlsx", dir);

    /* Files already there (--dir with --keep) are reused. */
    double t0 = now();
    if (file_size(csv) <= 0 && write_csv(csv, rows) != 0) {
        perror(csv);
        return 1;
    }
    if (file_size(xlsx) <= 0 && write_xlsx(xlsx, dir, rows) != 0) {
        fprintf(stderr, "bench: cannot write %s\n", xlsx);
        return 1;
    }
    printf("bench-readers: %ld rows x 10 columns of invented house sales, "
           "generated in %.1f s\n", rows, now() - t0);

    result ref = {0};

    long lines = 0;
    timing lim = {-1, -1};
    for (int k = 0; k < repeat + 1; k++) {  /* the first run warms the cache */
        timing t = csv_limit(csv, &lines);
        if (t.wall > 0 && (lim.wall < 0 || t.wall < lim.wall))
            lim = t;
    }
    if (lim.wall < 0) {
        fprintf(stderr, "bench: cannot read %s\n", csv);
        return 1;
    }
    printf("csv  %s: %.1f MB\n", csv, mb((double)file_size(csv)));
    print_speed("limit: read, count newlines", (size_t)(lines - 1), lim);
    report("csv_read", csv, READ_CSV, repeat, lim, rows, &ref);

    unsigned long long part = 0;
    timing xlim = {-1, -1};
    for (int k = 0; k < repeat; k++) {
        timing t = xlsx_limit(xlsx, &part);
        if (t.wall > 0 && (xlim.wall < 0 || t.wall < xlim.wall))
            xlim = t;
    }
    if (xlim.wall < 0) {
        fprintf(stderr, "bench: cannot inflate and parse %s in %s\n",
                SHEET_PART, xlsx);
        return 1;
    }
    printf("xlsx %s: %.1f MB, sheet part %.1f MB inflated\n", xlsx,
           mb((double)file_size(xlsx)), mb((double)part));
    print_speed("limit: inflate, expat, no-op", (size_t)rows, xlim);
#ifdef HAVE_XLSX
    report("xlsx_read", xlsx, READ_XLSX, repeat, xlim, rows, &ref);
#else
    printf("  %-32s not built (no io/xlsx.c)\n", "xlsx_read");
#endif
    if (!keep && dir_arg == NULL) {
        unlink(csv);
        unlink(xlsx);
        rmdir(dir);
    }
    return 0;
}
