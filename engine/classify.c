/*
 * classify.c: measures of a yes/no model from observed classes and
 * predicted probabilities (classify.h). One sort of the probabilities
 * serves both the AUC and the Hosmer-Lemeshow risk groups; the grouping
 * rule is also offered alone (classify_risk_groups). Not for fitting:
 * the probabilities come from whichever model the caller ran.
 */
#include "classify.h"

#include <assert.h>
#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_cdf.h>
#include <gsl/gsl_sort_double.h>

/* floor(k n / groups) without forming k n, which could overflow for huge
 * n; k <= groups <= CLASSIFY_GROUPS_MAX keeps k (n % groups) small. */
static size_t group_bound(size_t k, size_t n, size_t groups)
{
    return k * (n / groups) + k * (n % groups) / groups;
}

/* The risk-group rule of classify.h over the rows sorted by p (idx): the
 * end (one past the last sorted position) of each group into end[], which
 * has room for `groups` entries; returns the number of groups (at least 1
 * for n > 0). Shared by Hosmer-Lemeshow and classify_risk_groups, so that
 * a calibration table at ten groups shows the groups of the test. */
static size_t group_ends(const double *p, const size_t *idx, size_t n,
                         size_t groups, size_t *end)
{
    size_t g = 0, k = 1;
    while (k < groups && group_bound(k, n, groups) == 0)
        k++;
    for (size_t i = 0; i < n;) {
        size_t j = i;
        while (j < n && p[idx[j]] == p[idx[i]])
            j++;
        i = j;
        if (i < n && i >= group_bound(k, n, groups)) {
            end[g++] = i;
            while (k < groups && group_bound(k, n, groups) <= i)
                k++;
        }
    }
    end[g++] = n;  /* the last group, closed by the end of the rows */
    return g;
}

/* AUC as U / (n1 n0), U the Mann-Whitney count of (positive, negative)
 * pairs with the positive ranked higher, ties counting one half (Hanley &
 * McNeil 1982, Radiology 143:29). Over the rows sorted by p (idx), each
 * block of equal p contributes a * (negatives below + b / 2) for its a
 * positives and b negatives: O(n) after the O(n log n) sort. */
static double auc_sorted(const double *y, const double *p, const size_t *idx,
                         size_t n)
{
    double u = 0, below = 0, n1 = 0, n0 = 0;
    for (size_t i = 0; i < n;) {
        double a = 0, b = 0;
        size_t j = i;
        for (; j < n && p[idx[j]] == p[idx[i]]; j++) {
            if (y[idx[j]] == 1)
                a++;
            else
                b++;
        }
        u += a * (below + 0.5 * b);
        below += b;
        n1 += a;
        n0 += b;
        i = j;
    }
    if (n1 == 0 || n0 == 0)
        return NAN;
    return u / (n1 * n0);
}

/* Hosmer-Lemeshow C over deciles of risk (Hosmer, Lemeshow & Sturdivant
 * 2013, Applied Logistic Regression, 3rd ed., sec. 5.2.2); the grouping
 * and merging rules are stated in classify.h. Tie blocks are kept whole
 * because a rule that splits them makes C depend on the sort's order of
 * equal rows, and so on row order in the file. */
static void hosmer_lemeshow(const double *y, const double *p,
                            const size_t *idx, size_t n,
                            classify_measures *out)
{
    double gn[CLASSIFY_HL_GROUPS] = {0};  /* rows */
    double go[CLASSIFY_HL_GROUPS] = {0};  /* observed positives */
    double ge[CLASSIFY_HL_GROUPS] = {0};  /* expected: sum of p */
    size_t end[CLASSIFY_HL_GROUPS];
    int g = (int)group_ends(p, idx, n, CLASSIFY_HL_GROUPS, end);
    size_t j = 0;
    for (int t = 0; t < g; t++) {
        for (; j < end[t]; j++) {
            gn[t]++;
            go[t] += y[idx[j]];
            ge[t] += p[idx[j]];
        }
    }

    /* A group with n pbar (1 - pbar) = 0 has no variance to divide by. */
    for (;;) {
        int t = 0;
        while (t < g && ge[t] * (1 - ge[t] / gn[t]) > 0)
            t++;
        if (t == g || g < 2)
            break;
        int into = t + 1 < g ? t + 1 : t - 1;
        gn[into] += gn[t];
        go[into] += go[t];
        ge[into] += ge[t];
        for (int s = t; s + 1 < g; s++) {
            gn[s] = gn[s + 1];
            go[s] = go[s + 1];
            ge[s] = ge[s + 1];
        }
        g--;
    }

    out->hl_groups = g;
    if (g < 3) {
        out->hl_stat = out->hl_pvalue = NAN;
        out->hl_df = 0;
        return;
    }
    double c = 0;
    for (int t = 0; t < g; t++) {
        double d = go[t] - ge[t];
        c += d * d / (ge[t] * (1 - ge[t] / gn[t]));
    }
    out->hl_stat = c;
    out->hl_df = g - 2;
    out->hl_pvalue = gsl_cdf_chisq_Q(c, g - 2);
}

rf_status classify_measure(const double *y, const double *p, size_t n,
                           double threshold, classify_measures *out,
                           rf_error *err)
{
    assert(out != NULL);
    memset(out, 0, sizeof *out);
    if (n == 0)
        return error_set(err, RF_EINPUT, NULL,
                         "classification measures need at least one row");
    assert(y != NULL && p != NULL);
    if (!isfinite(threshold))
        return error_set(err, RF_EINPUT, NULL,
                         "threshold %g is not a number between 0 and 1",
                         threshold);
    for (size_t i = 0; i < n; i++) {
        if (!(y[i] == 0 || y[i] == 1))
            return error_set(err, RF_EINPUT, NULL,
                             "outcome %zu of %zu is %g, not 0 or 1",
                             i + 1, n, y[i]);
        if (!(p[i] >= 0 && p[i] <= 1))
            return error_set(err, RF_EINPUT, NULL,
                             "probability %zu of %zu is %g, not between "
                             "0 and 1", i + 1, n, p[i]);
    }
    if (n > SIZE_MAX / sizeof(size_t))
        return error_nomem(err, NULL);
    size_t *idx = malloc(n * sizeof *idx);
    if (idx == NULL)
        return error_nomem(err, NULL);

    classify_measures m = {0};
    m.n = n;
    m.threshold = threshold;
    long double sq = 0, ll = 0;
    for (size_t i = 0; i < n; i++) {
        int yes = y[i] == 1;
        if (p[i] >= threshold) {
            if (yes)
                m.tp++;
            else
                m.fp++;
        } else {
            if (yes)
                m.fn++;
            else
                m.tn++;
        }
        double d = p[i] - y[i];
        sq += d * d;
        /* The clip is applied to the probability of the observed class,
         * 1 - p formed before clipping (exact for p >= 1/2), so a certain
         * mistake costs ln(1e15) at either end: 1 - 1e-15 in double is
         * 1 - 0.999e-15, which would make the two ends differ. */
        double q = yes ? p[i] : 1 - p[i];
        ll -= log(fmin(fmax(q, CLASSIFY_CLIP), 1 - CLASSIFY_CLIP));
    }
    m.accuracy = (double)(m.tp + m.tn) / (double)n;
    m.precision = m.tp + m.fp > 0
                ? (double)m.tp / (double)(m.tp + m.fp) : NAN;
    m.recall = m.tp + m.fn > 0 ? (double)m.tp / (double)(m.tp + m.fn) : NAN;
    m.brier = (double)(sq / n);
    m.logloss = (double)(ll / n);

    gsl_sort_index(idx, p, 1, n);
    m.auc = auc_sorted(y, p, idx, n);
    hosmer_lemeshow(y, p, idx, n, &m);
    free(idx);
    *out = m;
    return RF_OK;
}

rf_status classify_risk_groups(const double *p, size_t n, size_t groups,
                               size_t *group, size_t *n_groups,
                               rf_error *err)
{
    assert(n_groups != NULL);
    if (n == 0)
        return error_set(err, RF_EINPUT, NULL,
                         "risk groups need at least one row");
    if (groups == 0 || groups > CLASSIFY_GROUPS_MAX)
        return error_set(err, RF_EINPUT, NULL,
                         "risk groups: %zu groups asked for; from 1 to %d "
                         "are possible", groups, CLASSIFY_GROUPS_MAX);
    assert(p != NULL && group != NULL);
    for (size_t i = 0; i < n; i++)
        if (!(p[i] >= 0 && p[i] <= 1))
            return error_set(err, RF_EINPUT, NULL,
                             "probability %zu of %zu is %g, not between "
                             "0 and 1", i + 1, n, p[i]);
    if (n > SIZE_MAX / sizeof(size_t))
        return error_nomem(err, NULL);
    size_t *idx = malloc(n * sizeof *idx);
    size_t *end = malloc(groups * sizeof *end);
    if (idx == NULL || end == NULL) {
        free(idx);
        free(end);
        return error_nomem(err, NULL);
    }
    gsl_sort_index(idx, p, 1, n);
    size_t g = group_ends(p, idx, n, groups, end);
    for (size_t t = 0, j = 0; t < g; t++)
        for (; j < end[t]; j++)
            group[idx[j]] = t;
    *n_groups = g;
    free(idx);
    free(end);
    return RF_OK;
}
