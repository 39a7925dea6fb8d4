/*
 * gen-houses.c: writes rowfit's demo scenario, invented house sales in the
 * fictional Brackenquill County, drawn from a known linear model so tests
 * can check rowfit's estimates and intervals against the truth. Not part of
 * rowfit and not a model of any real market.
 *
 *   gcc -O2 -std=c11 -Wall -Wextra -Wpedantic -o gen workbooks/gen-houses.c \
 *       -lgsl -lopenblas -lm
 *   ./gen [--seed N] [--rows N] [--listings N] [--out DIR]
 *
 * Writes DIR/house-sales.csv (sales; a few cells left messy on purpose),
 * DIR/house-listings.csv (current listings, no price) and
 * DIR/house-sales.truth (one line per true coefficient, "TERM VALUE", TERM
 * named as rowfit names it for workbooks/house-prices.job, then "sigma
 * VALUE"; TERM may hold spaces, VALUE is the last field of the line).
 *
 * The true model, with age = 2026 - year_built (the derive in the job):
 *   price = b0 + b_living*living_area + b_lot*lot_area + b_bed*bedrooms
 *         + b_bath*bathrooms + b_age*age + b_garage*garage
 *         + effect[district] + N(0, sigma^2)
 * The most frequent district has effect 0 (rowfit's reference level).
 * price is rounded to a whole unit, which adds noise of sd 0.29 units:
 * negligible beside sigma.
 *
 * Output depends only on the options: one generator (MT19937) drawn in a
 * fixed order, and numbers printed in the C locale (setlocale is never
 * called). Prints nothing on success.
 */
#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_errno.h>
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>

#define DEFAULT_SEED 20250601UL
#define DEFAULT_ROWS 3000
#define DEFAULT_LISTINGS 200
#define ROWS_MAX 10000000L  /* ids are printed with 5+ digits; sanity cap */
#define NOW_YEAR 2026       /* the year "age" counts from, as in the job */

/* Messy cells in the sales file at the default size; scaled for others. */
#define MESS_BLANK_BATH 5
#define MESS_NA_YEAR 3
#define MESS_BLANK_PRICE 20

enum { N_DISTRICT = 5 };

/* One district: its share of sales, its price effect against the
 * reference, and what its houses look like. Shares are clearly unequal so
 * the reference level (the most frequent) is not in doubt. */
typedef struct district {
    const char *name;
    double share;
    double effect;       /* currency units; the first is the reference */
    double living_mult;  /* on the county's median living area */
    double lot_median;   /* square metres */
    double year_mean, year_sd;
} district;

static const district DISTRICTS[N_DISTRICT] = {
    { "Velderhook",  0.36,      0.0, 1.00,  550.0, 1986.0, 18.0 },
    { "Quarrendip",  0.24,  22000.0, 0.86,  380.0, 1962.0, 24.0 },
    { "Mossgrindle", 0.17, -15000.0, 1.04,  720.0, 1999.0, 14.0 },
    { "Skellacombe", 0.14,  48000.0, 1.16,  900.0, 1954.0, 28.0 },
    { "Ambervask",   0.09, -31000.0, 0.97, 1400.0, 2008.0, 10.0 },
};

/* True coefficients, in the job's input order. */
static const double B0 = 60000.0;
static const double B_LIVING = 1450.0;  /* per square metre */
static const double B_LOT = 18.0;       /* per square metre */
static const double B_BED = -4000.0;    /* at equal living area */
static const double B_BATH = 9000.0;
static const double B_AGE = -650.0;     /* per year of age */
static const double B_GARAGE = 7500.0;  /* per car space */
static const double SIGMA = 18000.0;

typedef struct house {
    int date_y, date_m, date_d;
    double living, lot, bathrooms;
    int bedrooms, year_built, garage, district;
    double price;
} house;

static double clamp(double x, double lo, double hi)
{
    return x < lo ? lo : x > hi ? hi : x;
}

static int pick_district(gsl_rng *r)
{
    double u = gsl_rng_uniform(r), c = 0.0;
    for (int i = 0; i < N_DISTRICT - 1; i++) {
        c += DISTRICTS[i].share;
        if (u < c)
            return i;
    }
    return N_DISTRICT - 1;
}

/* A house's features, drawn so they move together as they do in a real
 * stock of houses (bigger homes have more rooms and larger lots; newer ones
 * more car spaces) without being collinear. */
static void draw_house(gsl_rng *r, house *h)
{
    h->district = pick_district(r);
    const district *d = &DISTRICTS[h->district];

    double z = gsl_ran_gaussian(r, 1.0);
    h->living = round(clamp(135.0 * d->living_mult * exp(0.33 * z), 42.0, 460.0));

    double lot = d->lot_median * exp(0.25 * z + gsl_ran_gaussian(r, 0.40));
    h->lot = round(clamp(lot, 120.0, 9000.0));

    double bed = 0.3 + h->living / 45.0 + gsl_ran_gaussian(r, 0.7);
    h->bedrooms = (int)clamp(round(bed), 1.0, 7.0);

    double bath = 0.8 + h->living / 95.0 + gsl_ran_gaussian(r, 0.45);
    h->bathrooms = clamp(round(bath * 2.0) / 2.0, 1.0, 4.5);

    double year = d->year_mean + gsl_ran_gaussian(r, d->year_sd);
    h->year_built = (int)clamp(round(year), 1890.0, 2025.0);

    double g = 0.3 + (h->year_built - 1950) / 40.0 + h->lot / 1600.0
             + gsl_ran_gaussian(r, 0.6);
    h->garage = (int)clamp(round(g), 0.0, 3.0);

    double age = NOW_YEAR - h->year_built;
    h->price = round(B0 + B_LIVING * h->living + B_LOT * h->lot
                     + B_BED * h->bedrooms + B_BATH * h->bathrooms
                     + B_AGE * age + B_GARAGE * h->garage + d->effect
                     + gsl_ran_gaussian(r, SIGMA));
}

static int days_in_month(int y, int m)
{
    static const int dm[12] = { 31, 28, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31 };
    int leap = (y % 4 == 0 && y % 100 != 0) || y % 400 == 0;
    return dm[m - 1] + (m == 2 && leap);
}

/* The date `offset` days after y-m-d (offset >= 0). */
static void add_days(int y, int m, int d, long offset, int *oy, int *om, int *od)
{
    while (offset > 0) {
        int left = days_in_month(y, m) - d;  /* days to the month's end */
        if (offset <= left) {
            d += (int)offset;
            break;
        }
        offset -= left + 1;
        d = 1;
        if (++m > 12) {
            m = 1;
            y++;
        }
    }
    *oy = y;
    *om = m;
    *od = d;
}

static int cmp_long(const void *a, const void *b)
{
    long x = *(const long *)a, y = *(const long *)b;
    return (x > y) - (x < y);
}

/* n day offsets in [0, span), sorted, so ids rise with the date as a
 * register's would. */
static long *draw_days(gsl_rng *r, long n, unsigned long span)
{
    long *days = malloc((size_t)n * sizeof *days);
    if (!days)
        return NULL;
    for (long i = 0; i < n; i++)
        days[i] = (long)gsl_rng_uniform_int(r, span);
    qsort(days, (size_t)n, sizeof *days, cmp_long);
    return days;
}

/* Closes f; 1 when every write and the close succeeded. */
static int close_ok(FILE *f)
{
    int bad = ferror(f);
    return (fclose(f) == 0) & !bad;
}

static void print_bathrooms(FILE *f, double b)
{
    if (b == floor(b))
        fprintf(f, "%.0f", b);
    else
        fprintf(f, "%.1f", b);
}

/* Cell marks for the messy rows of the sales file. */
enum { MESS_NONE = 0, MESS_BATH, MESS_YEAR, MESS_PRICE };

static int write_sales(const char *path, gsl_rng *r, long n)
{
    long *days = NULL;
    unsigned char *mess = NULL;
    size_t *all = NULL, *chosen = NULL;
    FILE *f = NULL;
    int ok = 0;

    /* Scale the messy counts down for smaller files (whole numbers, so a
     * small file may have none). */
    long n_bath = MESS_BLANK_BATH * n / DEFAULT_ROWS;
    long n_year = MESS_NA_YEAR * n / DEFAULT_ROWS;
    long n_price = MESS_BLANK_PRICE * n / DEFAULT_ROWS;
    if (n >= DEFAULT_ROWS) {
        n_bath = MESS_BLANK_BATH;
        n_year = MESS_NA_YEAR;
        n_price = MESS_BLANK_PRICE;
    }
    long n_mess = n_bath + n_year + n_price;

    days = draw_days(r, n, 365);  /* 2025 is not a leap year */
    mess = calloc((size_t)n, 1);
    all = malloc((size_t)n * sizeof *all);
    chosen = malloc((size_t)(n_mess > 0 ? n_mess : 1) * sizeof *chosen);
    if (!days || !mess || !all || !chosen) {
        fprintf(stderr, "gen-houses: out of memory\n");
        goto done;
    }
    /* Distinct rows, each with one flaw: a row with a blank price is one
     * rowfit should estimate, so it must not also be unusable. */
    if (n_mess > 0) {
        for (long i = 0; i < n; i++)
            all[i] = (size_t)i;
        gsl_ran_choose(r, chosen, (size_t)n_mess, all, (size_t)n, sizeof *all);
        gsl_ran_shuffle(r, chosen, (size_t)n_mess, sizeof *chosen);
        for (long k = 0; k < n_mess; k++)
            mess[chosen[k]] = k < n_bath ? MESS_BATH
                            : k < n_bath + n_year ? MESS_YEAR : MESS_PRICE;
    }

    f = fopen(path, "w");
    if (!f) {
        fprintf(stderr, "gen-houses: %s: %s\n", path, strerror(errno));
        goto done;
    }
    fprintf(f, "property_id,sale_date,living_area,lot_area,bedrooms,"
               "bathrooms,year_built,garage,district,price\n");
    for (long i = 0; i < n; i++) {
        house h;
        draw_house(r, &h);
        add_days(2025, 1, 1, days[i], &h.date_y, &h.date_m, &h.date_d);
        fprintf(f, "S-%05ld,%04d-%02d-%02d,%.0f,%.0f,%d,", i + 1,
                h.date_y, h.date_m, h.date_d, h.living, h.lot, h.bedrooms);
        if (mess[i] != MESS_BATH)
            print_bathrooms(f, h.bathrooms);
        if (mess[i] == MESS_YEAR)
            fprintf(f, ",n/a");
        else
            fprintf(f, ",%d", h.year_built);
        fprintf(f, ",%d,%s,", h.garage, DISTRICTS[h.district].name);
        if (mess[i] != MESS_PRICE)
            fprintf(f, "%.0f", h.price);
        fputc('\n', f);
    }
    ok = 1;

done:
    if (f && !close_ok(f)) {
        fprintf(stderr, "gen-houses: %s: write failed\n", path);
        ok = 0;
    }
    free(days);
    free(mess);
    free(all);
    free(chosen);
    return ok;
}

static int write_listings(const char *path, gsl_rng *r, long n)
{
    /* Listed over the 61 days before 2026-01-15. */
    long *days = draw_days(r, n > 0 ? n : 1, 61);
    FILE *f = NULL;
    int ok = 0;

    if (!days) {
        fprintf(stderr, "gen-houses: out of memory\n");
        return 0;
    }
    f = fopen(path, "w");
    if (!f) {
        fprintf(stderr, "gen-houses: %s: %s\n", path, strerror(errno));
        goto done;
    }
    fprintf(f, "property_id,listing_date,living_area,lot_area,bedrooms,"
               "bathrooms,year_built,garage,district\n");
    for (long i = 0; i < n; i++) {
        house h;
        draw_house(r, &h);  /* its price is drawn and not written */
        add_days(2025, 11, 15, days[i], &h.date_y, &h.date_m, &h.date_d);
        fprintf(f, "L-%05ld,%04d-%02d-%02d,%.0f,%.0f,%d,", i + 1,
                h.date_y, h.date_m, h.date_d, h.living, h.lot, h.bedrooms);
        print_bathrooms(f, h.bathrooms);
        fprintf(f, ",%d,%d,%s\n", h.year_built, h.garage,
                DISTRICTS[h.district].name);
    }
    ok = 1;

done:
    if (f && !close_ok(f)) {
        fprintf(stderr, "gen-houses: %s: write failed\n", path);
        ok = 0;
    }
    free(days);
    return ok;
}

static int write_truth(const char *path)
{
    FILE *f = fopen(path, "w");
    if (!f) {
        fprintf(stderr, "gen-houses: %s: %s\n", path, strerror(errno));
        return 0;
    }
    /* %.17g prints each double exactly enough to read it back. */
    fprintf(f, "(intercept) %.17g\n", B0);
    fprintf(f, "living_area %.17g\n", B_LIVING);
    fprintf(f, "lot_area %.17g\n", B_LOT);
    fprintf(f, "bedrooms %.17g\n", B_BED);
    fprintf(f, "bathrooms %.17g\n", B_BATH);
    fprintf(f, "age %.17g\n", B_AGE);
    fprintf(f, "garage %.17g\n", B_GARAGE);
    /* Levels in byte order, the order rowfit lists them in. */
    int order[N_DISTRICT - 1];
    for (int i = 0; i < N_DISTRICT - 1; i++)
        order[i] = i + 1;
    for (int i = 1; i < N_DISTRICT - 1; i++)
        for (int k = i; k > 0 && strcmp(DISTRICTS[order[k - 1]].name,
                                        DISTRICTS[order[k]].name) > 0; k--) {
            int tmp = order[k];
            order[k] = order[k - 1];
            order[k - 1] = tmp;
        }
    for (int i = 0; i < N_DISTRICT - 1; i++)
        fprintf(f, "district: %s %.17g\n", DISTRICTS[order[i]].name,
                DISTRICTS[order[i]].effect);
    fprintf(f, "sigma %.17g\n", SIGMA);
    if (!close_ok(f)) {
        fprintf(stderr, "gen-houses: %s: write failed\n", path);
        return 0;
    }
    return 1;
}

static int parse_count(const char *opt, const char *s, long lo, long hi,
                       long *out)
{
    char *end;
    errno = 0;
    long v = strtol(s, &end, 10);
    if (errno || end == s || *end || v < lo || v > hi) {
        fprintf(stderr, "gen-houses: %s wants a whole number from %ld to %ld, "
                        "not '%s'\n", opt, lo, hi, s);
        return 0;
    }
    *out = v;
    return 1;
}

static void usage(FILE *f)
{
    fprintf(f, "usage: gen-houses [--seed N] [--rows N] [--listings N] "
               "[--out DIR]\n");
}

int main(int argc, char **argv)
{
    long seed = (long)DEFAULT_SEED, rows = DEFAULT_ROWS,
         listings = DEFAULT_LISTINGS;
    const char *out = "workbooks";

    for (int i = 1; i < argc; i++) {
        const char *a = argv[i];
        if (!strcmp(a, "--help") || !strcmp(a, "-h")) {
            usage(stdout);
            return 0;
        }
        if (i + 1 >= argc) {
            usage(stderr);
            return 2;
        }
        const char *v = argv[++i];
        int good;
        if (!strcmp(a, "--seed"))
            good = parse_count(a, v, 0, 4294967295L, &seed);
        else if (!strcmp(a, "--rows"))
            good = parse_count(a, v, 1, ROWS_MAX, &rows);
        else if (!strcmp(a, "--listings"))
            good = parse_count(a, v, 0, ROWS_MAX, &listings);
        else if (!strcmp(a, "--out")) {
            out = v;
            good = 1;
        } else {
            fprintf(stderr, "gen-houses: unknown option '%s'\n", a);
            usage(stderr);
            return 2;
        }
        if (!good)
            return 2;
    }

    gsl_set_error_handler_off();
    gsl_rng *r = gsl_rng_alloc(gsl_rng_mt19937);
    if (!r) {
        fprintf(stderr, "gen-houses: out of memory\n");
        return 1;
    }
    gsl_rng_set(r, (unsigned long)seed);

    size_t len = strlen(out) + 32;
    char *path = malloc(len);
    int ok = path != NULL;
    if (ok) {
        snprintf(path, len, "%s/house-sales.csv", out);
        ok = write_sales(path, r, rows);
    }
    if (ok) {
        snprintf(path, len, "%s/house-listings.csv", out);
        ok = write_listings(path, r, listings);
    }
    if (ok) {
        snprintf(path, len, "%s/house-sales.truth", out);
        ok = write_truth(path);
    }
    if (!path)
        fprintf(stderr, "gen-houses: out of memory\n");
    free(path);
    gsl_rng_free(r);
    return ok ? 0 : 1;
}
