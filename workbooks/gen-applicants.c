/*
 * gen-applicants.c: writes rowfit's second demo scenario, invented
 * applicants to the Lamplighters' Apprenticeship of the fictional
 * Brackenquill County (the county of the house-sales demo; its four
 * invented wards are the regions), drawn from a known logistic model so
 * tests can check rowfit's coefficients against the truth. Not part of rowfit and not a model of any real programme, people
 * or place.
 *
 *   gcc -O2 -std=c11 -Wall -Wextra -Wpedantic -o gen workbooks/gen-applicants.c \
 *       -lgsl -lopenblas -lm
 *   ./gen [--seed N] [--rows N] [--new N] [--out DIR]
 *
 * Writes DIR/applicants.csv (past applicants and whether each completed; a
 * few cells left messy on purpose), DIR/new-applicants.csv (this year's
 * applicants, no `completed` column) and DIR/applicants.truth (one line per
 * true coefficient, "TERM VALUE", TERM named as rowfit names it for
 * workbooks/applicants.job; TERM may hold spaces, VALUE is the last field
 * of the line).
 *
 * The true model, on the log-odds scale of completed = yes:
 *   logit P(yes) = b0 + b_apt*aptitude_score + b_exp*years_experience
 *                + b_int*interview_rating + b_cert*[prior_certificate = yes]
 *                + effect[region]
 * and completed is one Bernoulli draw with that probability. "no" is the
 * more frequent prior_certificate and the first region the most frequent
 * region, so both are rowfit's reference levels (effect 0).
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

#define DEFAULT_SEED 20250914UL
#define DEFAULT_ROWS 1500
#define DEFAULT_NEW 150
#define ROWS_MAX 10000000L  /* ids are printed with 5+ digits; sanity cap */

/* Blank interview ratings in the past applicants at the default size;
 * scaled for others. */
#define MESS_BLANK_INTERVIEW 3

enum { N_REGION = 4 };

/* One region: its share of applicants, its effect on the log-odds against
 * the reference, and how its applicants differ. Shares are clearly unequal
 * so the reference level (the most frequent) is not in doubt. */
typedef struct region {
    const char *name;
    double share;
    double effect;        /* log-odds; the first is the reference */
    double aptitude_mean;
    double experience_mean;
} region;

static const region REGIONS[N_REGION] = {
    { "Tallow Ward", 0.46,  0.00, 62.0, 4.0 },
    { "Ember Ward",  0.27, -0.45, 60.0, 5.0 },
    { "Cinder Ward", 0.17,  0.30, 64.0, 3.0 },
    { "Wick Ward",   0.10, -0.80, 58.0, 6.0 },
};

/* Share of applicants holding a prior certificate: below one half, so
 * "no" is the reference level. */
#define CERT_SHARE 0.34

/* True coefficients, in the job's term order. */
static const double B0 = -4.2;
static const double B_APTITUDE = 0.045;   /* per point of 100 */
static const double B_EXPERIENCE = 0.11;  /* per year */
static const double B_INTERVIEW = 0.38;   /* per step of the 1-5 scale */
static const double B_CERT = 0.70;        /* yes against no */

typedef struct applicant {
    int aptitude, experience, interview, cert, region, completed;
} applicant;

static double clamp(double x, double lo, double hi)
{
    return x < lo ? lo : x > hi ? hi : x;
}

static int pick_region(gsl_rng *r)
{
    double u = gsl_rng_uniform(r), c = 0.0;
    for (int i = 0; i < N_REGION - 1; i++) {
        c += REGIONS[i].share;
        if (u < c)
            return i;
    }
    return N_REGION - 1;
}

/* An applicant's features, drawn so they move together as they would in
 * a real pool (a higher aptitude score goes with a better interview,
 * longer experience with a certificate) without being collinear. The
 * outcome is always drawn, so past and new applicants use the generator
 * alike. */
static void draw_applicant(gsl_rng *r, applicant *a)
{
    a->region = pick_region(r);
    const region *g = &REGIONS[a->region];

    double z = gsl_ran_gaussian(r, 1.0);
    a->aptitude = (int)clamp(round(g->aptitude_mean + 14.0 * z), 0.0, 100.0);

    a->experience = (int)clamp((double)gsl_ran_poisson(r, g->experience_mean),
                               0.0, 30.0);

    double cert_p = clamp(CERT_SHARE - 0.08 + 0.02 * a->experience, 0.05, 0.90);
    a->cert = gsl_rng_uniform(r) < cert_p;

    double iv = 3.0 + 0.55 * z + gsl_ran_gaussian(r, 0.85);
    a->interview = (int)clamp(round(iv), 1.0, 5.0);

    double eta = B0 + B_APTITUDE * a->aptitude + B_EXPERIENCE * a->experience
               + B_INTERVIEW * a->interview + B_CERT * a->cert + g->effect;
    a->completed = gsl_rng_uniform(r) < 1.0 / (1.0 + exp(-eta));
}

/* Closes f; 1 when every write and the close succeeded. */
static int close_ok(FILE *f)
{
    int bad = ferror(f);
    return (fclose(f) == 0) & !bad;
}

static int write_past(const char *path, gsl_rng *r, long n)
{
    unsigned char *mess = NULL;
    size_t *all = NULL, *chosen = NULL;
    FILE *f = NULL;
    int ok = 0;

    /* Scale the messy count down for smaller files (a whole number, so a
     * small file may have none). */
    long n_mess = n >= DEFAULT_ROWS ? MESS_BLANK_INTERVIEW
                                    : MESS_BLANK_INTERVIEW * n / DEFAULT_ROWS;

    mess = calloc((size_t)n, 1);
    all = malloc((size_t)n * sizeof *all);
    chosen = malloc((size_t)(n_mess > 0 ? n_mess : 1) * sizeof *chosen);
    if (!mess || !all || !chosen) {
        fprintf(stderr, "gen-applicants: out of memory\n");
        goto done;
    }
    if (n_mess > 0) {
        for (long i = 0; i < n; i++)
            all[i] = (size_t)i;
        gsl_ran_choose(r, chosen, (size_t)n_mess, all, (size_t)n, sizeof *all);
        for (long k = 0; k < n_mess; k++)
            mess[chosen[k]] = 1;
    }

    f = fopen(path, "w");
    if (!f) {
        fprintf(stderr, "gen-applicants: %s: %s\n", path, strerror(errno));
        goto done;
    }
    fprintf(f, "applicant_id,aptitude_score,years_experience,"
               "prior_certificate,interview_rating,region,completed\n");
    for (long i = 0; i < n; i++) {
        applicant a;
        draw_applicant(r, &a);
        fprintf(f, "P-%05ld,%d,%d,%s,", i + 1, a.aptitude, a.experience,
                a.cert ? "yes" : "no");
        if (!mess[i])
            fprintf(f, "%d", a.interview);
        fprintf(f, ",%s,%s\n", REGIONS[a.region].name,
                a.completed ? "yes" : "no");
    }
    ok = 1;

done:
    if (f && !close_ok(f)) {
        fprintf(stderr, "gen-applicants: %s: write failed\n", path);
        ok = 0;
    }
    free(mess);
    free(all);
    free(chosen);
    return ok;
}

static int write_new(const char *path, gsl_rng *r, long n)
{
    FILE *f = fopen(path, "w");
    if (!f) {
        fprintf(stderr, "gen-applicants: %s: %s\n", path, strerror(errno));
        return 0;
    }
    fprintf(f, "applicant_id,aptitude_score,years_experience,"
               "prior_certificate,interview_rating,region\n");
    for (long i = 0; i < n; i++) {
        applicant a;
        draw_applicant(r, &a);  /* its outcome is drawn and not written */
        fprintf(f, "N-%05ld,%d,%d,%s,%d,%s\n", i + 1, a.aptitude,
                a.experience, a.cert ? "yes" : "no", a.interview,
                REGIONS[a.region].name);
    }
    if (!close_ok(f)) {
        fprintf(stderr, "gen-applicants: %s: write failed\n", path);
        return 0;
    }
    return 1;
}

static int write_truth(const char *path)
{
    FILE *f = fopen(path, "w");
    if (!f) {
        fprintf(stderr, "gen-applicants: %s: %s\n", path, strerror(errno));
        return 0;
    }
    /* %.17g prints each double exactly enough to read it back. */
    fprintf(f, "(intercept) %.17g\n", B0);
    fprintf(f, "aptitude_score %.17g\n", B_APTITUDE);
    fprintf(f, "years_experience %.17g\n", B_EXPERIENCE);
    fprintf(f, "interview_rating %.17g\n", B_INTERVIEW);
    fprintf(f, "prior_certificate: yes %.17g\n", B_CERT);
    /* Levels in byte order, the order rowfit lists them in. */
    int order[N_REGION - 1];
    for (int i = 0; i < N_REGION - 1; i++)
        order[i] = i + 1;
    for (int i = 1; i < N_REGION - 1; i++)
        for (int k = i; k > 0 && strcmp(REGIONS[order[k - 1]].name,
                                        REGIONS[order[k]].name) > 0; k--) {
            int tmp = order[k];
            order[k] = order[k - 1];
            order[k - 1] = tmp;
        }
    for (int i = 0; i < N_REGION - 1; i++)
        fprintf(f, "region: %s %.17g\n", REGIONS[order[i]].name,
                REGIONS[order[i]].effect);
    if (!close_ok(f)) {
        fprintf(stderr, "gen-applicants: %s: write failed\n", path);
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
        fprintf(stderr, "gen-applicants: %s wants a whole number from %ld "
                        "to %ld, not '%s'\n", opt, lo, hi, s);
        return 0;
    }
    *out = v;
    return 1;
}

static void usage(FILE *f)
{
    fprintf(f, "usage: gen-applicants [--seed N] [--rows N] [--new N] "
               "[--out DIR]\n");
}

int main(int argc, char **argv)
{
    long seed = (long)DEFAULT_SEED, rows = DEFAULT_ROWS, fresh = DEFAULT_NEW;
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
        else if (!strcmp(a, "--new"))
            good = parse_count(a, v, 0, ROWS_MAX, &fresh);
        else if (!strcmp(a, "--out")) {
            out = v;
            good = 1;
        } else {
            fprintf(stderr, "gen-applicants: unknown option '%s'\n", a);
            usage(stderr);
            return 2;
        }
        if (!good)
            return 2;
    }

    gsl_set_error_handler_off();
    gsl_rng *r = gsl_rng_alloc(gsl_rng_mt19937);
    if (!r) {
        fprintf(stderr, "gen-applicants: out of memory\n");
        return 1;
    }
    gsl_rng_set(r, (unsigned long)seed);

    size_t len = strlen(out) + 32;
    char *path = malloc(len);
    int ok = path != NULL;
    if (ok) {
        snprintf(path, len, "%s/applicants.csv", out);
        ok = write_past(path, r, rows);
    }
    if (ok) {
        snprintf(path, len, "%s/new-applicants.csv", out);
        ok = write_new(path, r, fresh);
    }
    if (ok) {
        snprintf(path, len, "%s/applicants.truth", out);
        ok = write_truth(path);
    }
    if (!path)
        fprintf(stderr, "gen-applicants: out of memory\n");
    free(path);
    gsl_rng_free(r);
    return ok ? 0 : 1;
}
