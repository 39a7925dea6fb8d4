/*
 * classify.h: measures of a yes/no model from observed classes and
 * predicted probabilities: accuracy, precision and recall at a threshold,
 * the confusion matrix, AUC (Mann-Whitney), Brier score, log loss, and the
 * Hosmer-Lemeshow goodness-of-fit statistic. Model-agnostic: logistic and
 * network models and cross-validation share it. Knows arrays, not tables.
 */
#ifndef ROWFIT_CLASSIFY_H
#define ROWFIT_CLASSIFY_H

#include <stddef.h>

#include "../io/error.h"

/* Log loss clips p to [CLASSIFY_CLIP, 1 - CLASSIFY_CLIP] so that a row
 * predicted with certainty and wrong costs ln(1e15) = 34.5, not infinity.
 * The clip is applied to the probability given to the observed class (p for
 * a yes, 1 - p for a no), which is the same in exact arithmetic. */
#define CLASSIFY_CLIP 1e-15
/* Hosmer-Lemeshow: at most this many risk groups (deciles of risk). */
#define CLASSIFY_HL_GROUPS 10
/* classify_risk_groups: at most this many groups. A calibration table is
 * read by a person, and the bound keeps the group-edge arithmetic
 * (floor(k n / G), see classify.c) far from overflow. */
#define CLASSIFY_GROUPS_MAX 1000

typedef struct classify_measures {
    size_t n;
    size_t tp, fp, tn, fn;     /* at the threshold (p >= threshold: yes) */
    double threshold;
    double accuracy, precision, recall;  /* NaN when undefined */
    double auc;                /* ties count one half; NaN with one class */
    double brier, logloss;     /* p clipped to [1e-15, 1-1e-15] in log loss */
    double hl_stat, hl_pvalue; /* Hosmer-Lemeshow, groups by deciles of risk */
    int hl_groups, hl_df;
} classify_measures;

/* y: n values 0 or 1; p: n probabilities in [0, 1]; threshold finite.
 *
 * precision = tp / (tp + fp), NaN when nothing is predicted positive;
 * recall = tp / (tp + fn), NaN when no row is positive; AUC NaN when one
 * class is absent.
 *
 * Hosmer-Lemeshow grouping rule: rows sorted by p; with targets
 * b_k = floor(k n / 10), k = 1..10, blocks of rows with equal p are taken
 * in order and never split; a group closes after the first block that
 * brings the running count to b_k or beyond, and the next group aims at
 * the first b_k above that count (so every group is non-empty, n < 10
 * gives at most n groups, and big tie blocks give fewer groups). A group
 * whose n_k pbar_k (1 - pbar_k) is 0 (all its p are 0, or all 1) is merged
 * into the next group (the last one into the previous). With g groups
 * left, hl_groups = g; hl_df = g - 2 and the p value is the chi-squared
 * upper tail, or, when g < 3, hl_stat = hl_pvalue = NaN and hl_df = 0.
 *
 * Errors: RF_EINPUT for n = 0, a y not 0 or 1, a p outside [0, 1] or not
 * a number, a threshold not finite; RF_ENOMEM. *out is filled on RF_OK
 * only (on error it is left zeroed). */
rf_status classify_measure(const double *y, const double *p, size_t n,
                           double threshold, classify_measures *out,
                           rf_error *err);

/* Risk groups by predicted probability, by the Hosmer-Lemeshow grouping
 * rule above with `groups` in place of 10 (targets b_k = floor(k n /
 * groups), tie blocks never split, before any merging): classify_measure's
 * Hosmer-Lemeshow groups are the ones this gives for groups = 10, and a
 * calibration table uses the same. p: n probabilities in [0, 1]; group
 * (caller's, n entries) receives each row's group, 0 for the lowest
 * probabilities up to *n_groups - 1; *n_groups is at most min(groups, n),
 * fewer when tie blocks span targets, and every group is non-empty.
 * Errors: RF_EINPUT for n = 0, groups 0 or above CLASSIFY_GROUPS_MAX, a p
 * outside [0, 1] or not a number; RF_ENOMEM. On error group and *n_groups
 * are unspecified. */
rf_status classify_risk_groups(const double *p, size_t n, size_t groups,
                               size_t *group, size_t *n_groups,
                               rf_error *err);

#endif
