#!/usr/bin/python3
"""rowfit end to end for `model logistic` and `solver gradient`.

Runs the binary ($ROWFIT, default ./rowfit) on jobs written into a
temporary folder and reads the workbooks back with openpyxl (Debian's
python3-openpyxl, an independent .xlsx reader): once with data_only=True
for the cached values, once without for the formula text.

Oracles, each named again beside the check that uses it:
  - statsmodels' discrete Logit (Debian's python3-statsmodels, a test
    oracle only), fitted by Newton's method to tol 1e-14;
  - numpy (Debian's python3-numpy) for designs, gradients and sums done here;
  - scipy.stats (Debian's python3-scipy, installed with statsmodels) for
    the normal and chi-squared tails;
  - counts and sums written out here from the definitions in
    docs/workbook.md (AUC as the Mann-Whitney statistic, Brier score, log
    loss, confusion counts, Hosmer-Lemeshow grouping);
  - LibreOffice Calc headless (Debian's libreoffice-calc-nogui), through
    tests/e2e/test_recalc.py's helpers, for recalculating the live formulas.
The open dataset is statsmodels.datasets.anes96 (a subset of the American
National Election Studies 1996; its COPYRIGHT says "This is public domain"),
shipped inside python3-statsmodels and written to a CSV in the temporary
folder at test time only. Everything else is invented here or is the
project's invented demo (workbooks/applicants.*, workbooks/house-*).

Sheet, column and label names come from the contract
(shared/spec/contract.md section 3) and docs/workbook.md.

Without soffice the LibreOffice test is skipped with a note, unless
ROWFIT_REQUIRE_SOFFICE=1 (then it fails). ROWFIT_KEEP_TMP=1 keeps the
temporary folder.
Usage: ROWFIT=./rowfit /usr/bin/python3 tests/e2e/test_logistic.py [NAME-FRAGMENT...]
Prints PASS/FAIL per test and `N passed, M failed`; exits 1 on a failure.
"""
import csv
import math
import os
import shutil
import sys
import tempfile

sys.dont_write_bytecode = True  # keep the source tree clean
sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from common import (Runner, describe, is_num, main, make_dir, mann_whitney_auc,  # noqa: E402
                    need_numpy, oracle, records, rel_err, rowfit, run_job,
                    snapshot, strip_job, summary_measures, table, value, WB)
import openpyxl  # noqa: E402  (common re-runs us under Debian's python3)

np = need_numpy()

T = Runner()
test = T.test
TMP = tempfile.mkdtemp(prefix="rowfit-logistic-")

# Contract section 3 and docs/workbook.md ("Logistic model").
EST_FIXED = ["source", "row"]          # then id, target, then:
EST_LOGISTIC = ["probability", "predicted", "cv probability", "status"]  # cv: folds default to 5 from 50 rows
COEF_COLUMNS = ["term", "estimate", "std error", "z", "p value", "low", "high",
                "odds ratio", "odds low", "odds high", "note"]
SUMMARY_COMMON = ["model", "target", "rows read", "rows fitted", "rows skipped",
                  "rows estimated", "terms"]
SUMMARY_LOGISTIC = ["log likelihood", "null deviance", "residual deviance",
                    "aic", "mcfadden r squared", "accuracy", "precision",
                    "recall", "auc", "brier score", "log loss",
                    "hosmer-lemeshow", "hosmer-lemeshow p value",
                    "iterations", "threshold"]
SUMMARY_GRADIENT = ["solver", "iterations", "stopped", "final cost", "rate",
                    "agreement with exact"]
CLIP = 1e-15   # log loss clip, docs/workbook.md "log loss"


# ------------------------------------------------------------------ helpers

def near(a, b, rel, what, scale=0.0):
    """a (rowfit) equals b (the oracle) to rel relative, or to rel * scale."""
    assert is_num(a), "%s: rowfit gives %r, not a number" % (what, a)
    assert abs(a - b) <= rel * max(abs(b), scale), \
        "%s: rowfit %.17g, reference %.17g (rel %.3g, allowed %.1g)" % (
            what, a, b, abs(a - b) / max(abs(b), scale, 1e-300), rel)


class Result:
    """One rowfit run and its workbook, read both ways."""

    def __init__(self, d, job, out="result.xlsx", expect=0):
        self.dir = d
        self.proc, self.path = run_job(d, job, out, expect)
        if expect != 0:
            return
        self.wbf = openpyxl.load_workbook(self.path, data_only=False)
        self.wbv = openpyxl.load_workbook(self.path, data_only=True)

    def head(self, sheet):
        return table(self.wbv, sheet)[0]

    def est(self):
        """Estimates rows: dicts of cached values, and of formula cells."""
        return ([{k: value(c) for k, c in r.items()} for r in records(self.wbv, "Estimates")],
                records(self.wbf, "Estimates"))

    def coef(self):
        """term -> dict column -> cached value, in sheet order."""
        out = {}
        for r in records(self.wbv, "Coefficients"):
            out[value(r["term"])] = {k: value(c) for k, c in r.items()}
        return out

    def summary(self):
        """measure -> value (the measures block, above the first blank row)."""
        return summary_measures(self.wbv)

    def summary_rows(self):
        return list(self.wbv["Summary"].iter_rows(values_only=True))

    def confusion(self):
        """(threshold text, positive, negative, TP, FN, FP, TN) from the
        block under the measures."""
        rows = self.summary_rows()
        k = next((i for i, r in enumerate(rows)
                  if isinstance(r[0], str) and r[0].startswith("confusion matrix")), None)
        assert k is not None, "Summary has no confusion matrix block"
        head, obs_pos, obs_neg = rows[k + 1], rows[k + 2], rows[k + 3]
        assert str(head[1]).startswith("predicted ") and str(head[2]).startswith("predicted "), \
            "confusion header %r" % (head,)
        pos, neg = head[1][len("predicted "):], head[2][len("predicted "):]
        assert obs_pos[0] == "observed " + pos and obs_neg[0] == "observed " + neg, \
            "confusion rows %r / %r" % (obs_pos[:1], obs_neg[:1])
        return rows[k][0], pos, neg, obs_pos[1], obs_pos[2], obs_neg[1], obs_neg[2]


def is_label(v, label):
    """A target cell's value is the label (a number compares as a number)."""
    if is_num(v) and is_num(label):
        return v == label
    return str(v) == str(label)


def fitted_py(res, target, positive):
    """(probabilities, 0/1 outcomes) of the fitted rows, from cached values."""
    rows, _ = res.est()
    p = np.array([r["probability"] for r in rows if r["status"] == "fitted"], float)
    y = np.array([1.0 if is_label(r[target], positive) else 0.0
                  for r in rows if r["status"] == "fitted"])
    return p, y


def brier(p, y):   # docs/workbook.md "brier score"
    return float(np.mean((p - y) ** 2))


def log_loss(p, y):  # docs/workbook.md "log loss", clip to [1e-15, 1 - 1e-15]
    q = np.where(y == 1, p, 1 - p)
    return float(-np.mean(np.log(np.clip(q, CLIP, 1 - CLIP))))


def hosmer_lemeshow(p, y):
    """C and its group count by the grouping rule of docs/workbook.md
    (deciles of risk, ties never split; Hosmer, Lemeshow & Sturdivant,
    Applied Logistic Regression, 3rd ed., sec. 5.2.2)."""
    order = np.argsort(p, kind="stable")
    ps, ys = p[order], y[order]
    n = len(ps)
    targets = [(k * n) // 10 for k in range(1, 11)]
    groups, start, i, ti = [], 0, 0, 0
    while i < n:
        j = i
        while j < n and ps[j] == ps[i]:
            j += 1
        i = j
        if ti < 10 and i >= targets[ti]:
            groups.append((start, i))
            start = i
            while ti < 10 and targets[ti] <= i:
                ti += 1
    if start < n:
        groups.append((start, n))
    g = [[ps[a:b], ys[a:b]] for a, b in groups]
    k = 0
    while k < len(g):   # merge groups with n pbar (1 - pbar) = 0
        pp = g[k][0]
        pbar = pp.mean()
        if len(g) > 1 and len(pp) * pbar * (1 - pbar) == 0:
            other = k + 1 if k + 1 < len(g) else k - 1
            g[other] = [np.concatenate([g[min(k, other)][0], g[max(k, other)][0]]),
                        np.concatenate([g[min(k, other)][1], g[max(k, other)][1]])]
            del g[k]
            continue
        k += 1
    c = 0.0
    for pp, yy in g:
        e, o, nk = pp.sum(), yy.sum(), len(pp)
        c += (o - e) ** 2 / (e * (1 - e / nk))
    return c, len(g)


# -------------------------------------------------- the demo (applicants)

APPL_INPUTS = ["aptitude_score", "years_experience", "interview_rating"]
APPL_CATS = ["prior_certificate", "region"]
_DEMO = {}


def demo():
    """The demo job as shipped, run once (exact solver)."""
    if "error" in _DEMO:
        raise AssertionError("the demo run failed earlier: " + _DEMO["error"])
    if "res" not in _DEMO:
        try:
            d = make_dir(TMP, "demo", copy=("applicants.job", "applicants.csv",
                                            "new-applicants.csv"))
            _DEMO["res"] = Result(d, "applicants.job")
        except AssertionError as e:
            _DEMO["error"] = str(e)
            raise
    return _DEMO["res"]


def read_csv(path):
    """(line number, dict) per data row; the demo CSVs have no quoted
    newlines, so row k is line k + 1."""
    with open(path, newline="") as f:
        return [(n, r) for n, r in enumerate(csv.DictReader(f), start=2)]


def num(s):
    try:
        return float(s)
    except ValueError:
        return None


def applicants_design():
    """The demo's design built here in numpy from docs/workbook.md: the
    intercept, the number inputs, then per category one 0/1 column per
    level but the reference (the most frequent level; a tie to the one that
    sorts first), levels in byte order. Returns (terms, X, y, lines)."""
    rows = read_csv(os.path.join(WB, "applicants.csv"))
    use = [(n, r) for n, r in rows
           if r["completed"] in ("yes", "no")
           and all(num(r[c]) is not None for c in APPL_INPUTS)
           and all(r[c] != "" for c in APPL_CATS)]
    terms = ["(intercept)"] + APPL_INPUTS
    cols = [np.ones(len(use))] + [np.array([num(r[c]) for _, r in use]) for c in APPL_INPUTS]
    for c in APPL_CATS:
        counts = {}
        for _, r in use:
            counts[r[c]] = counts.get(r[c], 0) + 1
        levels = sorted(counts, key=lambda s: s.encode())
        ref = min(levels, key=lambda s: (-counts[s], s.encode()))
        for lv in levels:
            if lv != ref:
                terms.append("%s: %s" % (c, lv))
                cols.append(np.array([1.0 if r[c] == lv else 0.0 for _, r in use]))
    X = np.column_stack(cols)
    y = np.array([1.0 if r["completed"] == "yes" else 0.0 for _, r in use])
    return terms, X, y, [n for n, _ in use]


def compare_with_statsmodels(res, X, y, terms, what):
    """Every Coefficients and likelihood number of res against statsmodels'
    Logit (python3-statsmodels, test oracle) fitted by Newton's method to
    tol 1e-14 on the same design. Returns the statsmodels fit."""
    sm, stats = oracle()
    fit = sm.Logit(y, X).fit(method="newton", tol=1e-14, maxiter=100, disp=0)
    assert fit.mle_retvals["converged"], "%s: statsmodels did not converge" % what
    coef = res.coef()
    assert list(coef) == terms, "%s: terms %r, want %r" % (what, list(coef), terms)
    zstar = stats.norm.ppf(0.975)      # level 0.95; scipy.stats (python3-scipy)
    ci = np.asarray(fit.conf_int(0.05))
    for k, term in enumerate(terms):
        r = coef[term]
        b, se, z, pv = fit.params[k], fit.bse[k], fit.tvalues[k], fit.pvalues[k]
        w = "%s %s" % (what, term)
        # statsmodels Logit: estimate and std error to 7 significant digits
        near(r["estimate"], b, 1e-7, w + " estimate")
        near(r["std error"], se, 1e-7, w + " std error")
        near(r["z"], z, 1e-7, w + " z")
        # p value: its relative error grows like z^2 times that of z
        near(r["p value"], pv, 1e-7 * (2 + z * z), w + " p value (statsmodels)")
        near(r["low"], ci[k, 0], 1e-7, w + " low", abs(b) + se)
        near(r["high"], ci[k, 1], 1e-7, w + " high", abs(b) + se)
        near(r["odds ratio"], math.exp(b), 1e-7 * (1 + abs(b)), w + " odds ratio")
        near(r["odds low"], math.exp(ci[k, 0]), 1e-7 * (1 + abs(b) + se), w + " odds low")
        near(r["odds high"], math.exp(ci[k, 1]), 1e-7 * (1 + abs(b) + se), w + " odds high")
        # consistency within the row (definitions in docs/workbook.md),
        # normal tail and quantile from scipy.stats
        e, s = r["estimate"], r["std error"]
        near(r["z"], e / s, 1e-12, w + " z = estimate / std error")
        near(r["p value"], 2 * stats.norm.sf(abs(r["z"])), 1e-9, w + " p value = 2(1 - Phi(|z|))")
        near(r["low"], e - zstar * s, 1e-12, w + " low = b - z* se", abs(e) + s)
        near(r["high"], e + zstar * s, 1e-12, w + " high = b + z* se", abs(e) + s)
        near(r["odds ratio"], math.exp(e), 1e-13, w + " odds ratio = e^b")
        near(r["odds low"], math.exp(r["low"]), 1e-13, w + " odds low = e^low")
        near(r["odds high"], math.exp(r["high"]), 1e-13, w + " odds high = e^high")
    s = res.summary()
    n = len(y)
    # statsmodels Logit: llf, llnull, aic, bic, prsquared
    near(s["log likelihood"], fit.llf, 1e-9, what + " log likelihood")
    near(s["residual deviance"], -2 * fit.llf, 1e-9, what + " residual deviance")
    near(s["null deviance"], -2 * fit.llnull, 1e-9, what + " null deviance")
    near(s["aic"], fit.aic, 1e-9, what + " aic")
    near(s["bic"], fit.bic, 1e-9, what + " bic")
    near(s["mcfadden r squared"], fit.prsquared, 1e-8, what + " mcfadden r squared")
    assert s["rows fitted"] == n, "%s: rows fitted %r, want %d" % (what, s["rows fitted"], n)
    # probabilities of the fitted rows: statsmodels' predict
    p, _ = fitted_py(res, res.target, res.positive)
    q = fit.predict()
    assert len(p) == len(q), "%s: %d fitted probabilities, want %d" % (what, len(p), len(q))
    worst = float(np.max(np.abs(p - q) / q))
    assert worst < 1e-8, "%s: fitted probabilities differ from statsmodels by %.3g rel" % (what, worst)
    print("# %s vs statsmodels: worst coefficient rel %.2g, se rel %.2g, loglik rel %.2g, prob rel %.2g" % (
        what, max(rel_err(coef[t]["estimate"], fit.params[k]) for k, t in enumerate(terms)),
        max(rel_err(coef[t]["std error"], fit.bse[k]) for k, t in enumerate(terms)),
        rel_err(s["log likelihood"], fit.llf), worst))
    return fit


# ------------------------------------------------ 1. the demo's workbook

@test
def test_demo_sheets_columns_and_labels():
    res = demo()
    assert res.wbv.sheetnames == ["Estimates", "Coefficients", "Summary", "Validation", "Diagnostics", "Job"], \
        "sheets %r" % res.wbv.sheetnames   # contract section 3
    want = EST_FIXED + ["applicant_id", "completed"] + EST_LOGISTIC + APPL_INPUTS + APPL_CATS
    assert res.head("Estimates") == want, "Estimates header %r, want %r" % (res.head("Estimates"), want)
    assert res.head("Coefficients") == COEF_COLUMNS, "Coefficients header %r" % res.head("Coefficients")
    assert res.head("Summary")[:2] == ["measure", "value"], "Summary header %r" % res.head("Summary")
    s = res.summary()
    missing = [lb for lb in SUMMARY_COMMON + SUMMARY_LOGISTIC if lb not in s]
    assert not missing, "Summary lacks %r" % missing
    assert s["model"] == "logistic" and s["target"] == "completed", (s["model"], s["target"])
    assert s["threshold"] == 0.5, "threshold %r" % s["threshold"]
    # a caution row under the measures (docs/workbook.md, Summary)
    rows = res.summary_rows()
    assert any(r[0] == "caution" and "decision" in str(r[2]) for r in rows), \
        "no caution about decisions under the measures"
    res.confusion()
    text = "\n".join(str(c) for r in res.wbv["Job"].iter_rows(values_only=True) for c in r if c)
    for line in ("model logistic", "positive yes", "target completed"):
        assert line in text, "Job sheet lacks %r" % line


@test
def test_demo_rows_statuses_and_counts():
    res = demo()
    rows, _ = res.est()
    train = read_csv(os.path.join(WB, "applicants.csv"))
    score = read_csv(os.path.join(WB, "new-applicants.csv"))
    assert len(rows) == 1650 == len(train) + len(score), "%d Estimates rows" % len(rows)
    want = [("data", n, r["applicant_id"], r["completed"],
             "skipped: interview_rating is blank" if r["interview_rating"] == ""
             else "fitted") for n, r in train] + \
           [("score", n, r["applicant_id"], None, "estimated") for n, r in score]
    got = [(r["source"], r["row"], r["applicant_id"], r["completed"], r["status"]) for r in rows]
    for g, w in zip(got, want):
        assert g == w, "Estimates row %r, want %r" % (g, w)
    st = [r["status"] for r in rows]
    assert (st.count("fitted"), st.count("estimated")) == (1497, 150), \
        "fitted %d, estimated %d" % (st.count("fitted"), st.count("estimated"))
    assert sum(x.startswith("skipped: ") for x in st) == 3, "skipped %r" % [x for x in st if x.startswith("sk")]
    s = res.summary()
    assert (s["rows read"], s["rows fitted"], s["rows skipped"], s["rows estimated"]) == \
        (1650, 1497, 3, 150), "Summary counts %r" % ([s[k] for k in SUMMARY_COMMON[2:6]],)


@test
def test_demo_probabilities_and_predicted_labels():
    res = demo()
    rows, frows = res.est()
    thr = res.summary()["threshold"]
    n = 0
    for r, f in zip(rows, frows):
        w = "%s line %s" % (r["source"], r["row"])
        if r["status"].startswith("skipped"):
            assert r["probability"] is None and r["predicted"] is None, \
                "%s: skipped row has %r / %r" % (w, r["probability"], r["predicted"])
            continue
        p = r["probability"]
        assert is_num(p) and 0 < p < 1, "%s: probability %r" % (w, p)
        assert f["probability"].data_type == "f" and f["predicted"].data_type == "f", \
            "%s: probability / predicted are not live formulas" % w
        want = "yes" if p >= thr else "no"
        assert r["predicted"] == want, "%s: probability %r, predicted %r" % (w, p, r["predicted"])
        n += 1
    assert n == 1647, "checked %d rows" % n


@test
def test_demo_probabilities_follow_the_coefficients():
    # x.b worked out here (numpy) from the Coefficients sheet's cached
    # estimates and each row's own inputs, for every fitted and estimated row
    res = demo()
    coef = res.coef()
    rows, _ = res.est()
    worst = 0.0
    for r in rows:
        if r["status"] not in ("fitted", "estimated"):
            continue
        eta = coef["(intercept)"]["estimate"]
        for c in APPL_INPUTS:
            eta += coef[c]["estimate"] * r[c]
        for c in APPL_CATS:
            t = "%s: %s" % (c, r[c])
            if t in coef:
                eta += coef[t]["estimate"]
        p = 1 / (1 + math.exp(-eta))
        worst = max(worst, rel_err(r["probability"], p))
    assert worst < 1e-12, "probabilities differ from 1/(1+e^-x.b) by %.3g rel" % worst


# -------------------------------------------- 2. reference: statsmodels

ANES_INPUTS = ["logpopul", "TVnews", "selfLR", "ClinLR", "DoleLR", "PID",
               "age", "educ", "income"]
_ANES = {}


def anes():
    """statsmodels.datasets.anes96 (ANES 1996 subset, public domain, shipped
    in python3-statsmodels) written to a CSV in the temp folder, and a
    rowfit job on it: vote (0/1) on nine inputs, no `positive` line."""
    if "error" in _ANES:
        raise AssertionError("the anes96 run failed earlier: " + _ANES["error"])
    if "res" in _ANES:
        return _ANES
    try:
        oracle()
        from statsmodels.datasets import anes96
        data = anes96.load_pandas().data
        X = np.column_stack([np.ones(len(data))] +
                            [data[c].to_numpy(float) for c in ANES_INPUTS])
        y = data["vote"].to_numpy(float)
        assert set(y) == {0.0, 1.0}, "anes96 vote is not 0/1"
        lines = ["id,vote," + ",".join(ANES_INPUTS)]
        for i in range(len(y)):
            lines.append("A%03d,%d," % (i + 1, int(y[i])) +
                         ",".join(repr(float(v)) for v in X[i, 1:]))
        d = make_dir(TMP, "anes96", {
            "anes96.csv": "\n".join(lines) + "\n",
            "anes.job": "data anes96.csv\ntarget vote\nmodel logistic\n"
                             "inputs " + ", ".join(ANES_INPUTS) + "\nid id\n"})
        res = Result(d, "anes.job")
        res.target, res.positive = "vote", 1
        _ANES.update(res=res, X=X, y=y)
    except AssertionError as e:
        _ANES["error"] = str(e)
        raise
    return _ANES


@test
def test_anes96_matches_statsmodels_logit():
    # Dataset: statsmodels.datasets.anes96. Oracle: statsmodels Logit
    # (python3-statsmodels), Newton, tol 1e-14, maxiter 100.
    a = anes()
    compare_with_statsmodels(a["res"], a["X"], a["y"], ["(intercept)"] + ANES_INPUTS, "anes96")
    s = a["res"].summary()
    assert s["positive class"] in (1, "1"), "positive class %r (0/1 target)" % s["positive class"]


@test
def test_applicants_demo_matches_statsmodels_logit():
    # Dataset: the invented demo workbooks/applicants.csv, design built in
    # numpy here. Oracle: statsmodels Logit (python3-statsmodels), Newton,
    # tol 1e-14, maxiter 100.
    res = demo()
    res.target, res.positive = "completed", "yes"
    terms, X, y, _ = applicants_design()
    assert len(y) == 1497, "the design built here has %d rows" % len(y)
    compare_with_statsmodels(res, X, y, terms, "applicants")


# -------------------------------- 3. AUC, Brier score, log loss, H-L

def check_measures(res, target, positive, what):
    p, y = fitted_py(res, target, positive)
    s = res.summary()
    # Mann-Whitney by pair counting; Brier and log loss by their
    # definitions (docs/workbook.md), from the cached probabilities
    near(s["auc"], mann_whitney_auc(p, y), 1e-12, what + " auc (Mann-Whitney pairs)")
    near(s["brier score"], brier(p, y), 1e-12, what + " brier score")
    near(s["log loss"], log_loss(p, y), 1e-12, what + " log loss")
    # unclipped log loss is -ln L / n (docs/workbook.md)
    near(s["log loss"], -s["log likelihood"] / len(y), 1e-10, what + " log loss = -lnL/n")
    return p, y


@test
def test_demo_auc_brier_log_loss_from_cached_probabilities():
    check_measures(demo(), "completed", "yes", "applicants")


@test
def test_anes96_auc_brier_log_loss_from_cached_probabilities():
    check_measures(anes()["res"], "vote", 1, "anes96")


@test
def test_demo_hosmer_lemeshow_from_grouping_rule():
    # grouping written out here from docs/workbook.md; chi-squared tail from
    # scipy.stats (python3-scipy)
    _, stats = oracle()
    res = demo()
    p, y = fitted_py(res, "completed", "yes")
    c, g = hosmer_lemeshow(p, y)
    s = res.summary()
    near(s["hosmer-lemeshow"], c, 1e-10, "hosmer-lemeshow C (%d groups)" % g)
    near(s["hosmer-lemeshow p value"], stats.chi2.sf(c, g - 2), 1e-9, "hosmer-lemeshow p value")
    rows = {r[0]: r for r in res.summary_rows() if r[0]}
    assert "%d groups" % g in str(rows["hosmer-lemeshow"][2]), \
        "hosmer-lemeshow note %r does not say %d groups" % (rows["hosmer-lemeshow"][2], g)


# A dozen invented rows; one input, so with a positive coefficient the
# probabilities rank exactly as x does. Lines 4 and 10 have the same x and
# different outcomes: a tie between classes.
SMALL = """\
case,x,y
S01,0.3,0
S02,1.1,0
S03,1.9,1
S04,2.2,0
S05,2.6,0
S06,3.0,1
S07,3.4,0
S08,3.9,1
S09,4.4,1
S10,2.2,1
S11,5.2,1
S12,0.8,0
"""


@test
def test_small_case_measures_from_an_independent_fit():
    # Oracle: statsmodels Logit (python3-statsmodels), Newton, tol 1e-14.
    sm, _ = oracle()
    d = make_dir(TMP, "small", {"small.csv": SMALL, "small.job":
                                "data small.csv\ntarget y\nmodel logistic\ninputs x\nid case\n"})
    res = Result(d, "small.job")
    rows = [ln.split(",") for ln in SMALL.splitlines()[1:]]
    x = np.array([float(r[1]) for r in rows])
    y = np.array([float(r[2]) for r in rows])
    fit = sm.Logit(y, np.column_stack([np.ones(12), x])).fit(
        method="newton", tol=1e-14, maxiter=100, disp=0)
    q = fit.predict()
    p, yy = fitted_py(res, "y", 1)
    assert list(yy) == list(y), "fitted rows out of order"
    assert float(np.max(np.abs(p - q))) <= 1e-12, \
        "probabilities differ from statsmodels by %.3g" % float(np.max(np.abs(p - q)))
    s = res.summary()
    assert abs(s["brier score"] - brier(q, y)) <= 1e-12, \
        "brier %r, statsmodels probabilities give %r" % (s["brier score"], brier(q, y))
    assert abs(s["log loss"] - log_loss(q, y)) <= 1e-12, \
        "log loss %r, statsmodels probabilities give %r" % (s["log loss"], log_loss(q, y))
    assert abs(s["log likelihood"] - fit.llf) <= 1e-12 * abs(fit.llf), \
        "log likelihood %r, statsmodels %r" % (s["log likelihood"], fit.llf)
    # AUC from x alone (b > 0, so p ranks as x): pairs counted by hand here,
    # 6 positives x 6 negatives; the tie at x = 2.2 counts one half.
    assert res.coef()["x"]["estimate"] > 0 and fit.params[1] > 0, "slope not positive"
    gt = sum(1 for a in x[y == 1] for b in x[y == 0] if a > b)
    eq = sum(1 for a in x[y == 1] for b in x[y == 0] if a == b)
    assert eq == 1, "the tie is missing"
    auc = (gt + 0.5 * eq) / 36
    assert abs(s["auc"] - auc) <= 1e-12, "auc %r, Mann-Whitney on x %r" % (s["auc"], auc)


# -------------------------------------------------- 4. confusion block

def check_confusion(res, thr, what):
    rows, _ = res.est()
    fit = [r for r in rows if r["status"] == "fitted"]
    tp = sum(1 for r in fit if r["completed"] == "yes" and r["probability"] >= thr)
    fn = sum(1 for r in fit if r["completed"] == "yes" and r["probability"] < thr)
    fp = sum(1 for r in fit if r["completed"] == "no" and r["probability"] >= thr)
    tn = sum(1 for r in fit if r["completed"] == "no" and r["probability"] < thr)
    head, pos, neg, TP, FN, FP, TN = res.confusion()
    assert "threshold %g" % thr in head, "%s: block title %r" % (what, head)
    assert (pos, neg) == ("yes", "no"), "%s: labels %r" % (what, (pos, neg))
    assert (TP, FN, FP, TN) == (tp, fn, fp, tn), \
        "%s: block TP FN FP TN %r, Estimates give %r" % (what, (TP, FN, FP, TN), (tp, fn, fp, tn))
    # the cached predicted labels say the same
    assert sum(1 for r in fit if r["predicted"] == "yes") == tp + fp, "%s: predicted labels" % what
    s = res.summary()
    n = tp + fn + fp + tn
    assert n == 1497
    near(s["accuracy"], (tp + tn) / n, 1e-14, what + " accuracy")
    near(s["precision"], tp / (tp + fp), 1e-14, what + " precision")
    near(s["recall"], tp / (tp + fn), 1e-14, what + " recall")
    assert s["threshold"] == thr, "%s: threshold %r" % (what, s["threshold"])
    return tp, fn, fp, tn


@test
def test_demo_confusion_block_matches_estimates():
    check_confusion(demo(), 0.5, "threshold 0.5")


@test
def test_threshold_0_3_moves_the_counts():
    base = demo()
    d = make_dir(TMP, "thr03", {"t.job": strip_job(os.path.join(WB, "applicants.job")).replace(
        "threshold 0.5", "threshold 0.3")}, copy=("applicants.csv", "new-applicants.csv"))
    res = Result(d, "t.job")
    b_rows, _ = base.est()
    rows, frows = res.est()
    # the threshold does not move a probability
    assert [r["probability"] for r in rows] == [r["probability"] for r in b_rows], \
        "probabilities changed with the threshold"
    tp5, fn5, fp5, tn5 = check_confusion(base, 0.5, "threshold 0.5")
    tp3, fn3, fp3, tn3 = check_confusion(res, 0.3, "threshold 0.3")
    moved = sum(1 for r in rows if r["status"] == "fitted" and 0.3 <= r["probability"] < 0.5)
    assert moved > 0, "no fitted probability in [0.3, 0.5): the test cannot tell"
    assert tp3 + fp3 == tp5 + fp5 + moved and tp3 >= tp5 and fp3 >= fp5, \
        "predicted positive %d at 0.3, %d at 0.5, %d rows in between" % (tp3 + fp3, tp5 + fp5, moved)
    assert res.summary()["recall"] >= base.summary()["recall"], "recall fell as the threshold fell"
    # the live label compares with the same double 0.3, written in its
    # shortest form
    f = frows[0]["predicted"].value
    assert f == '=IF(E2>=0.3,"yes","no")', "predicted formula %r" % f


# ------------------------------------------------------- 5. separation

# Invented: x separates the classes completely (y = 1 exactly when x > 5);
# w is noise.
SEPARATED = """\
id,x,w,y
Q01,1.2,0.4,0
Q02,2.5,1.9,0
Q03,3.1,0.2,0
Q04,4.0,1.1,0
Q05,4.6,0.9,0
Q06,2.2,1.5,0
Q07,3.8,0.3,0
Q08,4.9,1.7,0
Q09,5.3,0.8,1
Q10,6.1,1.2,1
Q11,7.4,0.1,1
Q12,5.8,1.6,1
Q13,8.0,0.7,1
Q14,6.6,1.3,1
Q15,9.2,0.5,1
Q16,7.9,1.0,1
"""
SEP_JOB = "job sep\ndata sep.csv\ntarget y\nmodel logistic\ninputs x, w\nid id\n"


@test
def test_separation_is_refused_with_advice_and_nothing_written():
    d = make_dir(TMP, "sep", {"sep.csv": SEPARATED, "sep.job": SEP_JOB})
    before = snapshot(d)
    p = rowfit(["-q", "sep.job"], d)
    assert p.returncode == 1, "separated data: " + describe(p)
    err = p.stderr.lower()
    assert "separated" in err and "ridge" in err, "stderr %r" % p.stderr.strip()
    assert "'x'" in p.stderr, "stderr does not name the separating input x: %r" % p.stderr.strip()
    assert snapshot(d) == before, "files written: %r" % sorted(set(snapshot(d)) - set(before))


@test
def test_ridge_gives_finite_penalised_optimum():
    d = make_dir(TMP, "sep-ridge", {"sep.csv": SEPARATED, "sep.job": SEP_JOB + "ridge 1\n"})
    res = Result(d, "sep.job")
    coef = res.coef()
    assert list(coef) == ["(intercept)", "x", "w"], "terms %r" % list(coef)
    b = []
    for t, r in coef.items():
        assert is_num(r["estimate"]) and math.isfinite(r["estimate"]), "%s estimate %r" % (t, r["estimate"])
        near(r["odds ratio"], math.exp(r["estimate"]), 1e-13, t + " odds ratio")
        for col in ("std error", "z", "p value", "low", "high", "odds low", "odds high"):
            assert r[col] is None, "%s %s is %r, want blank under ridge" % (t, col, r[col])
        note = str(r["note"]).lower()
        assert "do not apply" in note and "standard error" in note, "%s note %r" % (t, r["note"])
        b.append(r["estimate"])
    b = np.array(b)
    assert res.summary().get("ridge") == 1, "Summary ridge %r" % res.summary().get("ridge")
    # numpy: the gradient of loglik - (ridge/2) sum_j (s_j b_j)^2, s_j the
    # population std dev (divisor n) over the fitted rows, intercept not
    # penalised (docs/workbook.md "Ridge"), is ~0 at rowfit's coefficients.
    rows = [ln.split(",") for ln in SEPARATED.splitlines()[1:]]
    X = np.array([[1.0, float(r[1]), float(r[2])] for r in rows])
    y = np.array([float(r[3]) for r in rows])
    s2 = np.array([0.0, X[:, 1].var(), X[:, 2].var()])   # numpy var: divisor n

    def grad(beta):
        p = 1 / (1 + np.exp(-X @ beta))
        g = X.T @ (y - p) - 1.0 * s2 * beta
        size = np.abs(X).T @ np.abs(y - p) + s2 * np.abs(beta)
        return g, size

    g, size = grad(b)
    rel = float(np.max(np.abs(g) / size))
    assert rel < 1e-8, "penalised gradient at rowfit's b: %r (relative %.3g)" % (g, rel)
    # the check can fail: a small move away from the optimum shows
    g2, size2 = grad(b + np.array([0.0, 1e-3, 0.0]))
    assert float(np.max(np.abs(g2) / size2)) > 1e-6, "the gradient check cannot tell"
    p = 1 / (1 + np.exp(-X @ b))
    ll = float(np.sum(y * np.log(p) + (1 - y) * np.log(1 - p)))
    near(res.summary()["log likelihood"], ll, 1e-12, "log likelihood at the penalised b")
    print("# ridge 1 on separated data: b = %r, relative gradient %.2g" % (list(b), rel))


# ------------------------------------------------- 6. solver gradient

def gradient_checks(res, exact, what, logistic):
    ce, cg = exact.coef(), res.coef()
    assert list(ce) == list(cg), "%s: terms differ %r / %r" % (what, list(ce), list(cg))
    worst = 0.0
    for t in ce:
        near(cg[t]["estimate"], ce[t]["estimate"], 1e-6, "%s %s (gradient vs exact)" % (what, t))
        worst = max(worst, rel_err(cg[t]["estimate"], ce[t]["estimate"]))
        assert cg[t]["std error"] is None, "%s %s: std error %r, want blank" % (what, t, cg[t]["std error"])
        assert "solver gradient gives no standard errors" in str(cg[t]["note"]), \
            "%s %s: note %r" % (what, t, cg[t]["note"])
    s = res.summary()
    missing = [lb for lb in SUMMARY_GRADIENT if lb not in s]
    assert not missing, "%s: Summary lacks %r" % (what, missing)
    assert s["solver"] == "gradient" and s["stopped"] == "converged", \
        "%s: solver %r, stopped %r" % (what, s["solver"], s["stopped"])
    assert is_num(s["iterations"]) and s["iterations"] >= 1, "%s: iterations %r" % (what, s["iterations"])
    assert is_num(s["rate"]) and s["rate"] > 0, "%s: rate %r" % (what, s["rate"])
    digits = min(16.0, -math.log10(worst)) if worst > 0 else 16.0
    assert s["agreement with exact"] >= 6 and abs(s["agreement with exact"] - digits) < 1e-3, \
        "%s: agreement with exact %r, measured here %.4f digits" % (what, s["agreement with exact"], digits)
    # final cost: mean log loss (logistic) or RSS / (2n) (linear), no penalty
    if logistic:
        near(s["final cost"], -s["log likelihood"] / s["rows fitted"], 1e-9, what + " final cost")
    else:
        near(s["final cost"], s["rmse"] ** 2 / 2, 1e-9, what + " final cost")
    print("# %s: gradient vs exact, worst relative difference %.2g (%.2f digits), %d epochs" % (
        what, worst, digits, s["iterations"]))


@test
def test_gradient_solver_on_applicants_demo():
    exact = demo()
    d = make_dir(TMP, "grad-appl", {"g.job": strip_job(os.path.join(WB, "applicants.job"),
                                                       ["solver gradient"])},
                 copy=("applicants.csv", "new-applicants.csv"))
    res = Result(d, "g.job")
    gradient_checks(res, exact, "applicants", True)
    rows, _ = res.est()
    erows, _ = exact.est()
    for r, e in zip(rows, erows):
        if r["status"] in ("fitted", "estimated"):
            near(r["probability"], e["probability"], 1e-6, "probability %s line %s" % (r["source"], r["row"]))


@test
def test_gradient_solver_on_house_prices_demo():
    files = ("house-prices.job", "house-sales.csv", "house-listings.csv")
    exact = Result(make_dir(TMP, "house-exact", copy=files), "house-prices.job")
    d = make_dir(TMP, "grad-house", {"g.job": strip_job(os.path.join(WB, "house-prices.job"),
                                                        ["solver gradient"])},
                 copy=files[1:])
    res = Result(d, "g.job")
    gradient_checks(res, exact, "house-prices", False)


@test
def test_gradient_solver_epoch_cap_is_an_error():
    d = make_dir(TMP, "grad-cap", {"g.job": strip_job(os.path.join(WB, "applicants.job"),
                                                      ["solver gradient", "epochs 3"])},
                 copy=("applicants.csv", "new-applicants.csv"))
    before = snapshot(d)
    p = rowfit(["-q", "g.job"], d)
    assert p.returncode == 1, "epochs 3: " + describe(p)
    assert "did not converge" in p.stderr, "stderr %r" % p.stderr.strip()
    assert snapshot(d) == before, "files written: %r" % sorted(set(snapshot(d)) - set(before))


# ----------------------------------------------------------- 7. labels

def labels_data():
    """40 invented rows drawn from a known logistic formula (numpy's
    generator, seed 7), with some overlap so there is no separation."""
    rng = np.random.default_rng(7)
    x = np.round(rng.normal(0, 1, 40), 3)
    z = np.round(rng.normal(0, 1, 40), 3)
    y = (x + 0.5 * z + 0.8 * rng.logistic(0, 1, 40) > 0).astype(int)
    return x, z, y


def labels_csv(fmt):
    x, z, y = labels_data()
    return "id,x,z,outcome\n" + "".join(
        "R%02d,%r,%r,%s\n" % (i + 1, float(x[i]), float(z[i]), fmt(y[i])) for i in range(40))


def labels_job(data, extra=""):
    return "data %s\ntarget outcome\nmodel logistic\ninputs x, z\nid id\n%s" % (data, extra)


_LABELS = {}


def numeric_labels_run():
    """The 0/1 target, without `positive`: the reference for the others."""
    if "res" not in _LABELS:
        d = make_dir(TMP, "labels-01", {"n.csv": labels_csv(str), "n.job": labels_job("n.csv")})
        _LABELS["res"] = Result(d, "n.job")
    return _LABELS["res"]


@test
def test_numeric_0_1_target_without_positive():
    res = numeric_labels_run()
    x, z, y = labels_data()
    s = res.summary()
    assert s["positive class"] in (1, "1"), "positive class %r" % s["positive class"]
    rows, _ = res.est()
    assert [r["outcome"] for r in rows] == [int(v) for v in y], "target column not the 0/1 values"
    for r in rows:
        assert str(r["predicted"]) == ("1" if r["probability"] >= 0.5 else "0"), \
            "line %s: probability %r, predicted %r" % (r["row"], r["probability"], r["predicted"])
    # oracle: statsmodels Logit (python3-statsmodels) on the same rows
    sm, _ = oracle()
    fit = sm.Logit(y.astype(float), np.column_stack([np.ones(40), x, z])).fit(
        method="newton", tol=1e-14, maxiter=100, disp=0)
    for k, t in enumerate(["(intercept)", "x", "z"]):
        near(res.coef()[t]["estimate"], fit.params[k], 1e-7, t + " vs statsmodels")


@test
def test_two_text_labels_with_positive():
    ref = numeric_labels_run()
    lab = lambda v: "completed" if v else "withdrew"   # noqa: E731
    d = make_dir(TMP, "labels-text", {"t.csv": labels_csv(lab),
                                      "t.job": labels_job("t.csv", "positive completed\n"),
                                      "w.job": labels_job("t.csv", "positive withdrew\n"),
                                      "none.job": labels_job("t.csv")})
    res = Result(d, "t.job", "t.xlsx")
    rows, _ = res.est()
    rrows, _ = ref.est()
    assert res.summary()["positive class"] == "completed", res.summary()["positive class"]
    for r, q in zip(rows, rrows):
        w = "line %s" % r["row"]
        assert r["outcome"] == lab(q["outcome"]), "%s: target %r" % (w, r["outcome"])
        # the same fit as the 0/1 target with 1 = completed
        near(r["probability"], q["probability"], 1e-12, w + " probability (vs 0/1 run)")
        assert r["predicted"] == ("completed" if r["probability"] >= 0.5 else "withdrew"), \
            "%s: predicted %r" % (w, r["predicted"])
    # positive withdrew: the probability of the other class, 1 - p
    res_w = Result(d, "w.job", "w.xlsx")
    for r, q in zip(res_w.est()[0], rows):
        near(r["probability"], 1 - q["probability"], 1e-12, "line %s: p(withdrew) = 1 - p(completed)" % r["row"])
    # without `positive` two text labels are refused (docs/workbook.md)
    before = snapshot(d)
    p = rowfit(["-q", "none.job"], d)
    assert p.returncode == 1 and "positive" in p.stderr, "no positive line: " + describe(p)
    assert snapshot(d) == before, "files written without `positive`"


@test
def test_boolean_target_in_xlsx():
    ref = numeric_labels_run()
    x, z, y = labels_data()
    d = make_dir(TMP, "labels-bool", {"b.job": labels_job("answers.xlsx")})
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "answers"
    ws.append(["id", "x", "z", "outcome"])
    for i in range(40):
        ws.append(["R%02d" % (i + 1), float(x[i]), float(z[i]), bool(y[i])])
    wb.save(os.path.join(d, "answers.xlsx"))
    check = openpyxl.load_workbook(os.path.join(d, "answers.xlsx"))
    assert check.active["D2"].data_type == "b", "openpyxl did not store a boolean"
    res = Result(d, "b.job")
    # the labels as a spreadsheet shows its yes-no cells: TRUE / FALSE,
    # the same text in the target column and in predicted
    assert res.summary()["positive class"] == "TRUE", res.summary()["positive class"]
    for r, q in zip(res.est()[0], ref.est()[0]):
        w = "line %s" % r["row"]
        near(r["probability"], q["probability"], 1e-12, w + " probability (vs 0/1 run)")
        assert r["predicted"] == ("TRUE" if r["probability"] >= 0.5 else "FALSE"), \
            "%s: predicted %r" % (w, r["predicted"])
        assert str(r["outcome"]) == ("TRUE" if q["outcome"] == 1 else "FALSE"), \
            "%s: target %r" % (w, r["outcome"])


# ------------------------------------------- 8. LibreOffice recalculation

def add_recalc_test():
    from test_recalc import POISON, find_soffice, poison, run_soffice
    if not find_soffice():
        if os.environ.get("ROWFIT_REQUIRE_SOFFICE") == "1":
            def test_libreoffice_soffice_installed():
                raise AssertionError("soffice not found (apt-get install libreoffice-calc-nogui)")
            test(test_libreoffice_soffice_installed)
        else:
            print("SKIP test_libreoffice_recalculates_demo_probabilities: soffice not "
                  "found (apt-get install libreoffice-calc-nogui)")
        return

    def test_libreoffice_recalculates_demo_probabilities():
        # Oracle: LibreOffice Calc headless (libreoffice-calc-nogui), forced
        # to recalculate on load (profile set up by test_recalc.run_soffice);
        # the poisoned canary proves that it did.
        res = demo()
        tmp = os.path.join(TMP, "recalc")
        os.makedirs(tmp)
        src = os.path.join(tmp, "applicants.xlsx")
        shutil.copy(res.path, src)
        canary = os.path.join(tmp, "canary.xlsx")
        assert poison(src, canary) > 0, "no cached formula value to poison"
        outdir = os.path.join(tmp, "out")
        os.mkdir(outdir)
        q, secs = run_soffice(find_soffice(), tmp, [src, canary], outdir)
        print("# soffice conversion took %.1f s" % secs)
        got = {}
        for f in (src, canary):
            out = os.path.join(outdir, os.path.basename(f))
            assert os.path.exists(out), "soffice wrote no %s: %s" % (os.path.basename(f), describe(q))
            got[f] = openpyxl.load_workbook(out, data_only=True)["Estimates"]
        head = res.head("Estimates")
        cp = openpyxl.utils.get_column_letter(head.index("probability") + 1)
        cl = openpyxl.utils.get_column_letter(head.index("predicted") + 1)
        ours = res.wbv["Estimates"]
        n, worst = 0, 0.0
        for i in range(2, ours.max_row + 1):
            a = ours["%s%d" % (cp, i)].value
            if a is None:
                continue
            for f in (src, canary):
                b = got[f]["%s%d" % (cp, i)].value
                assert is_num(b) and b != POISON, "%s!%s%d: LibreOffice gives %r" % (
                    os.path.basename(f), cp, i, b)
                d = abs(a - b) / abs(a)
                worst = max(worst, d)
                assert d <= 1e-12, "%s%d: LibreOffice %r, rowfit %r (rel %.2g)" % (cp, i, b, a, d)
                lb = got[f]["%s%d" % (cl, i)].value
                assert lb == ours["%s%d" % (cl, i)].value, "%s%d: LibreOffice label %r, rowfit %r" % (
                    cl, i, lb, ours["%s%d" % (cl, i)].value)
            n += 1
        assert n == 1647, "compared %d probabilities" % n
        print("# LibreOffice: %d probabilities, largest relative difference %.2g" % (n, worst))
    test(test_libreoffice_recalculates_demo_probabilities)


add_recalc_test()


if __name__ == "__main__":
    main(T, TMP)
