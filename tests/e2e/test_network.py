#!/usr/bin/python3
"""rowfit end to end: `model network` (a tanh multilayer perceptron, a
regression for numbers and a classifier for yes/no targets): its sheets and
labels, the Weights sheet recomputed into every estimate, its Summary
measures, what it learns that a linear model cannot, a reference check
against scikit-learn, determinism, and bad input.

Runs the binary ($ROWFIT, default ./rowfit) on jobs written into a temporary
folder and reads the workbooks back with openpyxl (Debian's python3-openpyxl,
an independent .xlsx reader; cached values, data_only=True, unless a check
is about which cells are formulas).

Oracles, each named again beside the check that uses it:
  - numpy (Debian's python3-numpy): the network's forward pass written out
    from the rule the Weights sheet states (engine/network.h: inputs
    standardized as (value - mean) / scale, TANH hidden units, a linear
    output scaled back as mean + scale x output, or a logistic output), and
    the measures (rmse, mae, r squared, accuracy, precision, recall, AUC,
    Brier score, log loss) from their definitions;
  - scikit-learn (Debian's python3-sklearn 1.2, a test oracle only):
    MLPRegressor and MLPClassifier with the same architecture, solver and
    penalty, on a fixed train/test split (test_reference_*).
Open datasets, written to CSV in the temporary folder at test time only:
  - the diabetes data of Efron, Hastie, Johnstone & Tibshirani, "Least
    Angle Regression", Annals of Statistics 32 (2004) 407-499: 442 rows,
    10 inputs, a numeric target; shipped inside python3-sklearn as
    sklearn/datasets/data/diabetes_data_raw.csv.gz and
    diabetes_target.csv.gz (read by sklearn.datasets.load_diabetes with
    scaled=False, the raw values), under the package's "Files: *" entry of
    /usr/share/doc/python3-sklearn/copyright, BSD-3-Clause;
  - statsmodels.datasets.anes96 (a subset of the American National Election
    Studies 1996; its COPYRIGHT says "This is public domain"), shipped
    inside python3-statsmodels, for the classifier.
Everything else is invented here (numpy generators with fixed seeds) or is
the project's invented demo (workbooks/house-*, workbooks/applicants.*).

Sheet, column and label names come from the contract
(shared/spec/contract.md sections 2 and 3) and engine/report.c.

ROWFIT_KEEP_TMP=1 keeps the temporary folder.
Usage: ROWFIT=./rowfit /usr/bin/python3 tests/e2e/test_network.py [NAME-FRAGMENT...]
Prints PASS/FAIL per test and `N passed, M failed`; exits 1 on a failure.
"""
import math
import os
import re
import sys
import tempfile
import warnings

sys.dont_write_bytecode = True  # keep the source tree clean
sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from common import REPO, Runner, describe, rowfit  # noqa: E402
from common import WorkbookRun, is_num, main  # noqa: E402
from common import make_dir as common_make_dir  # noqa: E402
import openpyxl  # noqa: E402  (common re-runs us under Debian's python3)

try:
    import numpy as np
except ImportError:  # pragma: no cover
    print("FAIL numpy_installed: needs python3-numpy (Debian's /usr/bin/python3)")
    print("0 passed, 1 failed")
    sys.exit(1)

T = Runner()
test = T.test
TMP = tempfile.mkdtemp(prefix="rowfit-network-")
WB = os.path.join(REPO, "workbooks")

# Contract section 3: a network has Weights in place of Coefficients and no
# Diagnostics.
SHEETS_CV = ["Estimates", "Weights", "Summary", "Validation", "Job"]
SHEETS_NO_CV = ["Estimates", "Weights", "Summary", "Job"]
COMMON = ["model", "target", "rows read", "rows fitted", "rows skipped",
          "rows estimated", "terms"]
TRAINING = ["hidden", "weights", "solver", "epochs", "stopped",
            "training loss", "validation loss", "restarts"]
NUMERIC = ["r squared", "rmse", "mae"]
CLASSIFY = ["positive class", "accuracy", "precision", "recall", "auc",
            "brier score", "log loss", "threshold"]
CV_NUMERIC = ["folds", "cv rmse", "cv mae", "cv r squared"]
CV_CLASSIFY = ["folds", "cv accuracy", "cv auc", "cv log loss"]
CLIP = 1e-15   # log loss clip, docs/workbook.md "log loss"
UNITS_MAX, LAYERS_MAX, RESTARTS_MAX = 1000, 4, 100   # engine/job.h
ROWS_PER_WEIGHT = 10   # engine/fit.c NETWORK_ROWS_PER_WEIGHT


# ------------------------------------------------------------------ helpers

def make_dir(name, files=None, copy=()):
    """A fresh folder under TMP (common.make_dir)."""
    return common_make_dir(TMP, name, files, copy)


def csv_text(names, cols):
    """A CSV of columns; numbers at full precision (repr), text as is."""
    lines = [",".join(names)]
    for i in range(len(cols[0])):
        lines.append(",".join(c[i] if isinstance(c[i], str) else repr(float(c[i]))
                              for c in cols))
    return "\n".join(lines) + "\n"


def demo_job(path, model, add=()):
    """A demo job file's directives without comments, its model replaced."""
    with open(path) as f:
        lines = [ln for ln in f.read().splitlines()
                 if ln.strip() and not ln.lstrip().startswith("#")]
    lines = ["model " + model if ln.startswith("model ") else ln for ln in lines]
    return "\n".join(lines + list(add)) + "\n"


class Run(WorkbookRun):
    """One rowfit run and its workbook (cached values)."""

    def est(self):
        rows = self.rows("Estimates")
        h = self.head("Estimates")
        return [dict(zip(h, r[:len(h)])) for r in rows[1:] if r[0] is not None]

    def fitted(self):
        return [r for r in self.est() if str(r["status"]).startswith("fitted")]

    def summary_rows(self):
        """(measure, value, note) of the measures block, in order."""
        out = []
        for row in self.rows("Summary")[1:]:
            if row[0] is None:
                break
            out.append(row[:3])
        return out

    def summary(self):
        out = {}
        for m, v, _ in self.summary_rows():
            assert m not in out, "Summary measure %r twice" % m
            out[m] = v
        return out

    def importance(self):
        """input -> importance, from the table under the header row
        `input` / `importance` in Summary."""
        rows = self.rows("Summary")
        k = [i for i, r in enumerate(rows) if r[0] == "input" and r[1] == "importance"]
        assert len(k) == 1, "Summary has %d input/importance headers" % len(k)
        out = []
        for r in rows[k[0] + 1:]:
            if r[0] is None:
                break
            out.append((r[0], r[1]))
        return out

    def weights(self):
        """The Weights sheet: the weight rows (layer, from, to, weight) and
        the standardizing block (input, mean, scale, note)."""
        rows = self.rows("Weights")
        w = [r[:4] for r in rows[1:] if r[0] is not None]
        std = [r[5:9] for r in rows[1:] if len(r) > 5 and r[5] is not None]
        return w, std


def network_from_sheet(run):
    """The network as the Weights sheet states it: the input terms with
    their mean and scale, the target's mean and scale, and the weight
    matrices W[l] (units out x units in) and bias vectors b[l]."""
    wrows, std = run.weights()
    assert std and std[-1][0] == "(target)", "Weights: last standardizing row %r" % (std[-1:],)
    terms = [s[0] for s in std[:-1]]
    mean = np.array([s[1] for s in std[:-1]], float)
    scale = np.array([s[2] for s in std[:-1]], float)
    y_mean, y_scale = float(std[-1][1]), float(std[-1][2])
    layers = sorted({int(r[0]) for r in wrows})
    assert layers == list(range(1, len(layers) + 1)), "Weights layers %r" % layers
    W, b = [], []
    n_in = len(terms)
    for l in layers:
        rows = [r for r in wrows if int(r[0]) == l]
        tos = []
        for r in rows:
            if r[2] not in tos:
                tos.append(r[2])
        Wl = np.full((len(tos), n_in), np.nan)
        bl = np.full(len(tos), np.nan)
        for _, frm, to, w in rows:
            o = tos.index(to)
            if frm == "bias":
                bl[o] = w
            elif l == 1:
                Wl[o, terms.index(frm)] = w
            else:
                m = re.fullmatch(r"h%d\.(\d+)" % (l - 1), frm)
                assert m, "Weights layer %d: from %r" % (l, frm)
                Wl[o, int(m.group(1)) - 1] = w
        assert not np.isnan(Wl).any() and not np.isnan(bl).any(), \
            "Weights layer %d: a weight is missing" % l
        W.append(Wl)
        b.append(bl)
        n_in = len(tos)
    return {"terms": terms, "mean": mean, "scale": scale, "y_mean": y_mean,
            "y_scale": y_scale, "W": W, "b": b}


def term_columns(terms, rows):
    """The design columns of the rows for the given terms, from the
    Estimates input columns: an input is its column, 'name: level' is 1
    where the category column says level."""
    cols = []
    for t in terms:
        if t in rows[0]:
            cols.append([float(r[t]) for r in rows])
        else:
            name, level = t.split(": ", 1)
            cols.append([1.0 if str(r[name]) == level else 0.0 for r in rows])
    return np.array(cols, float).T


def forward(net, X, classify):
    """numpy oracle: the forward pass as the Weights sheet's notes state it."""
    a = (X - net["mean"]) / net["scale"]
    L = len(net["W"])
    for l in range(L):
        z = a @ net["W"][l].T + net["b"][l]
        a = np.tanh(z) if l + 1 < L else z
    out = a[:, 0]
    if classify:
        return 1.0 / (1.0 + np.exp(-out))
    return net["y_mean"] + net["y_scale"] * out


def auc(y, p):
    """Mann-Whitney: the share of (positive, negative) pairs ranked right,
    ties counting a half."""
    pos, neg = p[y == 1], p[y == 0]
    gt = (pos[:, None] > neg[None, :]).sum()
    eq = (pos[:, None] == neg[None, :]).sum()
    return (gt + 0.5 * eq) / (len(pos) * len(neg))


def logloss(y, p):
    p = np.clip(p, CLIP, 1 - CLIP)
    return float(-np.mean(y * np.log(p) + (1 - y) * np.log(1 - p)))


def close(a, b, rel):
    return is_num(a) and abs(a - b) <= rel * max(abs(b), 1e-300)


# ------------------------------------------------------------ invented data

def interaction_data(n=400, seed=11):
    """Invented: a house's price is its area times a price per square metre
    that differs by district (Lowmarsh 1500, Mill End 3000, Harbour Rise
    4500), plus noise of sd 8000. A linear model with area and district
    indicators adds a fixed amount per district and cannot follow the
    three slopes; the product is what a network has to learn."""
    rng = np.random.default_rng(seed)
    rate = {"Lowmarsh": 1500.0, "Mill End": 3000.0, "Harbour Rise": 4500.0}
    dist = rng.choice(list(rate), size=n)
    area = rng.uniform(50, 220, size=n)
    price = np.array([a * rate[d] for a, d in zip(area, dist)]) + rng.normal(0, 8000, n)
    return csv_text(["area", "district", "price"], [area, list(dist), price])


def xor_data(n=400, seed=12):
    """Invented XOR: a lamp in a 2 x 2 grid of fictional switches is lit
    ('on') when the two dials are on the same side of zero. Points within
    0.1 of an axis are left out, so the classes have a margin."""
    rng = np.random.default_rng(seed)
    pts = []
    while len(pts) < n:
        a, b = rng.uniform(-1, 1, 2)
        if abs(a) > 0.1 and abs(b) > 0.1:
            pts.append((a, b))
    a = np.array([p[0] for p in pts])
    b = np.array([p[1] for p in pts])
    lit = ["on" if x * y > 0 else "off" for x, y in zip(a, b)]
    return csv_text(["dial_a", "dial_b", "lamp"], [a, b, lit])


# ------------------------------------------------------------ shared runs

_cache = {}


def house_net():
    """The house demo with `model network` (cached: several tests read it)."""
    if "house" not in _cache:
        d = make_dir("house-net", {"h.job": demo_job(os.path.join(WB, "house-prices.job"), "network")},
                     copy=("house-sales.csv", "house-listings.csv"))
        _cache["house"] = Run(d, "h.job")
    return _cache["house"]


def applicants_net():
    """The yes/no demo with `model network` (cached)."""
    if "app" not in _cache:
        d = make_dir("app-net", {"a.job": demo_job(os.path.join(WB, "applicants.job"), "network")},
                     copy=("applicants.csv", "new-applicants.csv"))
        _cache["app"] = Run(d, "a.job")
    return _cache["app"]


def deep_adam_net():
    """Two hidden layers trained by Adam on the interaction data, few
    epochs (cached)."""
    if "deep" not in _cache:
        d = make_dir("deep-adam", {
            "p.csv": interaction_data(300, seed=21),
            "p.job": "data p.csv\ntarget price\ninputs area\ncategories district\n"
                     "model network\nhidden 5, 3\nsolver adam\nepochs 40\nrate 0.01\n"
                     "folds 0\nseed 7\n"})
        _cache["deep"] = Run(d, "p.job")
    return _cache["deep"]


# ------------------------------------------------------------ sheets, labels

@test
def test_sheet_order_and_estimates_columns():
    """Contract section 3: Estimates, Weights, Summary, Validation (folds),
    Job; no Coefficients, no Diagnostics. Estimates columns for a number
    and for a yes/no target; estimate and probability (one hidden layer),
    residual and predicted are live formulas."""
    h, a = house_net(), applicants_net()
    for run, what in ((h, "house"), (a, "applicants")):
        assert run.wb.sheetnames == SHEETS_CV, "%s: sheets %r" % (what, run.wb.sheetnames)
    assert deep_adam_net().wb.sheetnames == SHEETS_NO_CV, \
        "folds 0: sheets %r" % deep_adam_net().wb.sheetnames
    want_h = ["source", "row", "property_id", "price", "estimate", "residual",
              "cv estimate", "status", "living_area", "lot_area", "bedrooms",
              "bathrooms", "age", "garage", "district"]
    got = h.head("Estimates")
    assert got[:len(want_h)] == want_h, "house Estimates header %r" % got
    want_a = ["source", "row", "applicant_id", "completed", "probability", "predicted",
              "cv probability", "status", "aptitude_score", "years_experience",
              "interview_rating", "prior_certificate", "region"]
    got = a.head("Estimates")
    assert got == want_a, "applicants Estimates header %r" % got
    # formulas or values: the workbook as stored, not cached values
    for run, est, second, cv in ((h, "estimate", "residual", "cv estimate"),
                                 (a, "probability", "predicted", "cv probability")):
        wb = openpyxl.load_workbook(run.path, data_only=False)
        ws = wb["Estimates"]
        head = [c.value for c in next(ws.iter_rows(max_row=1))]
        ie, i2, icv, ist = (head.index(est), head.index(second), head.index(cv),
                            head.index("status"))
        n = {"fitted": 0, "estimated": 0}
        for r in ws.iter_rows(min_row=2):
            st = r[ist].value
            if st not in n:
                continue
            n[st] += 1
            # one hidden layer: a live formula over the Weights sheet
            # (TANH); deeper networks write values (engine/report.c
            # network_formula)
            assert r[ie].data_type == "f" and "TANH(" in r[ie].value, \
                "%s row %s: %s is %r, not a live TANH formula" % (
                    run.path, r[0].row, est, r[ie].value)
            if st == "fitted":
                assert r[icv].data_type == "n", "%s row %s: %s not a number" % (run.path, r[0].row, cv)
            else:
                assert r[icv].value is None, "%s row %s: estimated row has a %s" % (run.path, r[0].row, cv)
            # the residual of a fitted row, and every row's predicted label
            if st == "fitted" or second == "predicted":
                assert r[i2].data_type == "f", "%s row %s: %s is %r, not a formula" % (
                    run.path, r[0].row, second, r[i2].value)
        assert n["fitted"] > 1000 and n["estimated"] > 100, "%s: rows %r" % (run.path, n)


@test
def test_weights_sheet_order_and_labels():
    """Weights: header layer/from/to/weight with input/mean/scale/note
    beside it; rows layer by layer, each unit's inputs in order then its
    bias; units named h1.1 ..., the last 'output'; the row count is the
    Summary's `weights`; the standardizing block lists the design terms
    (numeric inputs in job order, then the non-reference levels of each
    category) and ends with a `(target)` row."""
    for run, hidden in ((house_net(), [8]), (applicants_net(), [8]), (deep_adam_net(), [5, 3])):
        head = run.head("Weights")
        assert head == ["layer", "from", "to", "weight", None, "input", "mean", "scale", "note"], \
            "%s: Weights header %r" % (run.path, head)
        wrows, std = run.weights()
        terms = [s[0] for s in std[:-1]]
        assert std[-1][0] == "(target)", "%s: last standardizing row %r" % (run.path, std[-1])
        units = [len(terms)] + hidden + [1]
        expect = []
        for l in range(len(units) - 1):
            for o in range(units[l + 1]):
                to = "output" if l + 2 == len(units) else "h%d.%d" % (l + 1, o + 1)
                frm = terms if l == 0 else ["h%d.%d" % (l, i + 1) for i in range(units[l])]
                expect += [(l + 1, f, to) for f in frm + ["bias"]]
        got = [(int(r[0]), r[1], r[2]) for r in wrows]
        assert got == expect, "%s: Weights rows differ from the layer-by-layer order; " \
            "first difference at %r" % (run.path, next(((i, g, e) for i, (g, e) in
                                                        enumerate(zip(got, expect)) if g != e),
                                                       (len(got), len(expect))))
        assert all(is_num(r[3]) and math.isfinite(r[3]) for r in wrows), "%s: a weight is not a number" % run.path
        s = run.summary()
        assert s["weights"] == len(wrows), "%s: Summary weights %r, sheet %d" % (run.path, s["weights"], len(wrows))
        assert s["hidden"] == ", ".join(map(str, hidden)), "%s: Summary hidden %r" % (run.path, s["hidden"])
        # an indicator's scale is its standard deviation (divisor n) over the
        # training rows: sqrt(m (1 - m)) for a 0/1 column of mean m
        for t, m, sc, _ in std[:-1]:
            assert is_num(m) and is_num(sc) and sc > 0, "%s: %s mean %r scale %r" % (run.path, t, m, sc)
            if ": " in t:
                assert 0 < m < 1 and close(sc, math.sqrt(m * (1 - m)), 1e-12), \
                    "%s: indicator %s mean %r scale %r, want sqrt(m(1-m)) = %r" % (
                        run.path, t, m, sc, math.sqrt(m * (1 - m)))
    # the design terms, from the data: numeric inputs in job order, then
    # every district but the most frequent among the fitted rows
    h = house_net()
    terms = [s[0] for s in h.weights()[1][:-1]]
    fit = h.fitted()
    counts = {}
    for r in fit:
        counts[r["district"]] = counts.get(r["district"], 0) + 1
    ref = max(counts, key=counts.get)
    want = ["living_area", "lot_area", "bedrooms", "bathrooms", "age", "garage"]
    assert terms[:6] == want, "house terms %r" % terms
    assert sorted(terms[6:]) == sorted("district: " + k for k in counts if k != ref), \
        "house category terms %r (reference %s)" % (terms[6:], ref)
    ts = h.weights()[1][-1]
    assert ts[1] > 0 and ts[2] > 0, "house (target) mean %r scale %r" % (ts[1], ts[2])
    at = applicants_net().weights()[1][-1]
    assert (at[1], at[2]) == (0, 1), "yes/no (target) mean %r scale %r, want 0 and 1" % (at[1], at[2])


@test
def test_weights_reproduce_every_estimate():
    """numpy oracle: the Weights sheet's weights and standardizing, run
    forward as its notes state, give every fitted and estimated row's cached
    estimate or probability to 1e-12 relative (a floor of the target's scale
    for estimates near 0). Three networks: the house demo (regression, one
    layer), the applicants demo (yes/no), two hidden layers by Adam."""
    for run, classify in ((house_net(), False), (applicants_net(), True), (deep_adam_net(), False)):
        net = network_from_sheet(run)
        rows = [r for r in run.est() if str(r["status"]).startswith(("fitted", "estimated"))]
        n_est = sum(1 for r in rows if r["status"] == "estimated")
        assert n_est > 0 or run is deep_adam_net(), "%s: no estimated rows" % run.path
        col = "probability" if classify else "estimate"
        got = np.array([r[col] for r in rows], float)
        want = forward(net, term_columns(net["terms"], rows), classify)
        floor = 1e-300 if classify else net["y_scale"]
        err = np.abs(got - want) / np.maximum(np.abs(want), floor)
        k = int(np.argmax(err))
        assert err[k] <= 1e-12, "%s: %s of %s row %s is %r, the Weights sheet gives %r (rel %.2e)" % (
            run.path, col, rows[k]["source"], rows[k]["row"], got[k], want[k], err[k])
        s = run.summary()
        assert s["rows fitted"] + s["rows estimated"] == len(rows), \
            "%s: %d rows with a value, Summary says %r + %r" % (
                run.path, len(rows), s["rows fitted"], s["rows estimated"])


# ------------------------------------------------------------ Summary

@test
def test_summary_labels_and_regression_measures():
    """Summary rows in order (contract section 3 and engine/report.c
    write_summary_network); r squared, rmse, mae and the cv measures
    recomputed in numpy from the Estimates sheet."""
    run = house_net()
    labels = [m for m, _, _ in run.summary_rows()]
    want = COMMON + TRAINING + NUMERIC + CV_NUMERIC
    assert labels == want, "Summary labels %r, want %r" % (labels, want)
    s = run.summary()
    assert s["model"] == "network" and s["target"] == "price", "model %r target %r" % (s["model"], s["target"])
    fit = run.fitted()
    y = np.array([r["price"] for r in fit], float)
    e = np.array([r["estimate"] for r in fit], float)
    cv = np.array([r["cv estimate"] for r in fit], float)
    assert s["rows fitted"] == len(fit), "rows fitted %r, Estimates %d" % (s["rows fitted"], len(fit))
    res = np.array([r["residual"] for r in fit], float)
    assert np.max(np.abs(res - (y - e))) <= 1e-9 * np.max(np.abs(y)), "residual is not target - estimate"
    tss = np.sum((y - y.mean()) ** 2)
    for name, want_v in (("rmse", math.sqrt(np.mean((y - e) ** 2))),
                         ("mae", np.mean(np.abs(y - e))),
                         ("r squared", 1 - np.sum((y - e) ** 2) / tss),
                         ("cv rmse", math.sqrt(np.mean((y - cv) ** 2))),
                         ("cv mae", np.mean(np.abs(y - cv))),
                         ("cv r squared", 1 - np.sum((y - cv) ** 2) / tss)):
        assert close(s[name], want_v, 1e-9), "%s %r, numpy %r" % (name, s[name], want_v)
    assert s["solver"] in ("lbfgs", "adam"), "solver %r" % s["solver"]
    assert s["stopped"] in ("early", "converged", "at the cap"), "stopped %r" % s["stopped"]
    assert is_num(s["epochs"]) and s["epochs"] >= 1, "epochs %r" % s["epochs"]
    assert s["restarts"] == 1, "restarts %r" % s["restarts"]
    for k in ("training loss", "validation loss"):
        assert is_num(s[k]) and s[k] > 0, "%s %r" % (k, s[k])
    # `solver adam` with `epochs 40`: the cap is kept and reported
    a = deep_adam_net().summary()
    assert a["solver"] == "adam" and 1 <= a["epochs"] <= 40, "adam: solver %r epochs %r" % (a["solver"], a["epochs"])
    assert (a["stopped"] == "at the cap") == (a["epochs"] == 40), "adam: stopped %r after %r epochs" % (
        a["stopped"], a["epochs"])
    # the training loss is a mean squared error in price units squared: the
    # fitted rows' MSE mixes training and held-out rows, so it lies between
    assert 0.5 < s["training loss"] / np.mean((y - e) ** 2) < 2, \
        "training loss %r against fitted-row MSE %r" % (s["training loss"], np.mean((y - e) ** 2))


@test
def test_summary_classifier_measures_and_confusion():
    """The yes/no demo: Summary labels in order; accuracy, precision,
    recall, AUC (Mann-Whitney), Brier score, log loss and the confusion
    block recomputed in numpy from the Estimates probabilities; the
    predicted label is the threshold's; a caution row."""
    run = applicants_net()
    labels = [m for m, _, _ in run.summary_rows()]
    want = COMMON + TRAINING + CLASSIFY + CV_CLASSIFY
    assert labels == want, "Summary labels %r, want %r" % (labels, want)
    s = run.summary()
    fit = run.fitted()
    y = np.array([1 if r["completed"] == "yes" else 0 for r in fit])
    p = np.array([r["probability"] for r in fit], float)
    cv = np.array([r["cv probability"] for r in fit], float)
    thr = s["threshold"]
    assert thr == 0.5, "threshold %r" % thr
    for r in run.est():
        if r["probability"] is not None:
            want_l = "yes" if r["probability"] >= thr else "no"
            assert r["predicted"] == want_l, "row %s: predicted %r at p=%r" % (r["row"], r["predicted"], r["probability"])
    pred = p >= thr
    tp, fn = int(np.sum(pred & (y == 1))), int(np.sum(~pred & (y == 1)))
    fp, tn = int(np.sum(pred & (y == 0))), int(np.sum(~pred & (y == 0)))
    for name, want_v in (("accuracy", (tp + tn) / len(y)), ("precision", tp / (tp + fp)),
                         ("recall", tp / (tp + fn)), ("auc", auc(y, p)),
                         ("brier score", np.mean((p - y) ** 2)), ("log loss", logloss(y, p)),
                         ("cv accuracy", np.mean((cv >= thr) == (y == 1))),
                         ("cv auc", auc(y, cv)), ("cv log loss", logloss(y, cv))):
        assert close(s[name], want_v, 1e-9), "%s %r, numpy %r" % (name, s[name], want_v)
    rows = run.rows("Summary")
    k = [i for i, r in enumerate(rows) if isinstance(r[0], str) and r[0].startswith("confusion matrix")]
    assert len(k) == 1, "confusion block: %d headers" % len(k)
    blk = rows[k[0]:k[0] + 4]
    assert blk[1][1:3] == ("predicted yes", "predicted no"), "confusion head %r" % (blk[1],)
    assert blk[2][:3] == ("observed yes", tp, fn) and blk[3][:3] == ("observed no", fp, tn), \
        "confusion %r %r, numpy tp fn fp tn %d %d %d %d" % (blk[2], blk[3], tp, fn, fp, tn)
    assert any(r[0] == "caution" for r in rows), "no caution row in Summary"
    assert s["positive class"] == "yes", "positive class %r" % s["positive class"]


@test
def test_importance_lists_every_input():
    """The importance table names every input as the job does (a category
    once, not per level), in job order, each a finite number; the inputs
    the invented demos are built on come out on top."""
    for run, inputs, top in (
            (house_net(), ["living_area", "lot_area", "bedrooms", "bathrooms", "age",
                           "garage", "district"], "living_area"),
            (applicants_net(), ["aptitude_score", "years_experience", "interview_rating",
                                "prior_certificate", "region"], "aptitude_score"),
            (deep_adam_net(), ["area", "district"], None)):
        imp = run.importance()
        assert [k for k, _ in imp] == inputs, "%s: importance inputs %r" % (run.path, [k for k, _ in imp])
        assert all(is_num(v) and math.isfinite(v) for _, v in imp), "%s: importance %r" % (run.path, imp)
        if top:
            best = max(imp, key=lambda kv: kv[1])[0]
            # workbooks/gen-houses.c and gen-applicants.c: price grows
            # mostly with living area; completion mostly with aptitude
            assert best == top, "%s: most important %r, want %r (%r)" % (run.path, best, top, imp)


# ------------------------------------------------------------ demos

@test
def test_demos_with_network_give_sane_measures():
    """The two demos with `model network` against the same demos with the
    linear and logistic models (the same job otherwise): the network's
    cross-validated measures within a few percent of theirs (the demos are
    drawn from a linear and a logistic formula, so the network has nothing
    more to find), and well above chance."""
    h = house_net()
    d = make_dir("house-lin", {"h.job": demo_job(os.path.join(WB, "house-prices.job"), "linear")},
                 copy=("house-sales.csv", "house-listings.csv"))
    lin = Run(d, "h.job").summary()
    s = h.summary()
    assert s["cv r squared"] > 0.9, "house network cv r squared %r" % s["cv r squared"]
    assert s["cv rmse"] <= 1.10 * lin["cv rmse"], \
        "house network cv rmse %r, linear %r" % (s["cv rmse"], lin["cv rmse"])
    a = applicants_net()
    d = make_dir("app-logit", {"a.job": demo_job(os.path.join(WB, "applicants.job"), "logistic")},
                 copy=("applicants.csv", "new-applicants.csv"))
    lo = Run(d, "a.job").summary()
    s = a.summary()
    fit = a.fitted()
    share_yes = sum(1 for r in fit if r["completed"] == "yes") / len(fit)
    assert s["cv accuracy"] > max(share_yes, 1 - share_yes) + 0.05, \
        "applicants network cv accuracy %r, majority class %r" % (s["cv accuracy"], max(share_yes, 1 - share_yes))
    assert s["cv auc"] > 0.65 and s["cv auc"] >= lo["cv auc"] - 0.03, \
        "applicants network cv auc %r, logistic %r" % (s["cv auc"], lo["cv auc"])
    assert s["cv log loss"] <= 1.05 * lo["cv log loss"], \
        "applicants network cv log loss %r, logistic %r" % (s["cv log loss"], lo["cv log loss"])


# ------------------------------------------------------------ what it learns

@test
def test_interaction_beats_linear_model():
    """Invented price per area by district (interaction_data): the
    network's cv rmse is at most half the linear model's on the same rows
    and folds (a linear model cannot follow three slopes; the noise sd is
    8000, so a network that finds the product gets near it)."""
    files = {"p.csv": interaction_data()}
    d = make_dir("interaction", files)
    base = "data p.csv\ntarget price\ninputs area\ncategories district\nfolds 5\nseed 3\n"
    with open(os.path.join(d, "net.job"), "w") as f:
        f.write(base + "model network\nhidden 6\n")
    with open(os.path.join(d, "lin.job"), "w") as f:
        f.write(base + "model linear\n")
    net = Run(d, "net.job", out="net.xlsx").summary()
    lin = Run(d, "lin.job", out="lin.xlsx").summary()
    print("  interaction: network cv rmse %.0f, linear cv rmse %.0f (noise sd 8000)"
          % (net["cv rmse"], lin["cv rmse"]))
    assert net["cv rmse"] <= 0.5 * lin["cv rmse"], \
        "network cv rmse %r is not at most half the linear model's %r" % (net["cv rmse"], lin["cv rmse"])
    assert net["cv rmse"] < 1.5 * 8000, "network cv rmse %r, noise sd 8000" % net["cv rmse"]


@test
def test_xor_classified():
    """Invented XOR (xor_data): the network's fitted and cross-validated
    accuracy are above 95%; a logistic model on the same rows stays near
    chance (below 70%), so the check can tell the two apart."""
    d = make_dir("xor", {"x.csv": xor_data()})
    base = "data x.csv\ntarget lamp\npositive on\ninputs dial_a, dial_b\nfolds 5\n"
    with open(os.path.join(d, "net.job"), "w") as f:
        f.write(base + "model network\nhidden 8\n")
    with open(os.path.join(d, "log.job"), "w") as f:
        f.write(base + "model logistic\n")
    net = Run(d, "net.job", out="net.xlsx").summary()
    log = Run(d, "log.job", out="log.xlsx").summary()
    print("  xor: network accuracy %.3f, cv accuracy %.3f; logistic cv accuracy %.3f"
          % (net["accuracy"], net["cv accuracy"], log["cv accuracy"]))
    assert net["accuracy"] > 0.95, "network accuracy %r" % net["accuracy"]
    assert net["cv accuracy"] > 0.95, "network cv accuracy %r" % net["cv accuracy"]
    assert log["cv accuracy"] < 0.70, "logistic cv accuracy %r: the data is not XOR-like" % log["cv accuracy"]


# ------------------------------------------------------------ reference

def split_files(d, names, target, X, y, n_test, fmt_y=repr):
    """A fixed split (numpy default_rng(2024) permutation): the first
    n_test rows of the permutation are the test rows, written without the
    target as the score table; the rest, with it, as the data table."""
    perm = np.random.default_rng(2024).permutation(len(y))
    te, tr = perm[:n_test], perm[n_test:]
    with open(os.path.join(d, "train.csv"), "w") as f:
        f.write(",".join(names + [target]) + "\n")
        for i in tr:
            f.write(",".join(repr(float(v)) for v in X[i]) + "," + fmt_y(y[i]) + "\n")
    with open(os.path.join(d, "test.csv"), "w") as f:
        f.write(",".join(names) + "\n")
        for i in te:
            f.write(",".join(repr(float(v)) for v in X[i]) + "\n")
    return tr, te


def score_column(run, col):
    return np.array([r[col] for r in run.est() if r["source"] == "score"], float)


ORACLE_SEEDS = range(5)


@test
def test_reference_regressor_against_sklearn():
    """Diabetes data (Efron et al. 2004, shipped in python3-sklearn; see the
    header), 342 training rows, 100 test rows kept aside. rowfit: hidden 4,
    ridge 10, solver lbfgs. Oracle: scikit-learn's MLPRegressor, the same
    architecture (hidden_layer_sizes=(4,), activation='tanh', solver
    'lbfgs', max_iter 1000), alpha=10, which is the same penalty (sklearn
    adds alpha/2 x sum W^2 / n to the mean half squared error, as rowfit's
    ridge does, engine/network.h), inputs by StandardScaler in a Pipeline
    and the target by StandardScaler in a TransformedTargetRegressor (rowfit
    standardizes both). The oracle has no early stopping with lbfgs and
    trains on all 342 rows, rowfit on 90% of them. Fair comparison: the
    median test RMSE over oracle seeds 0-4. rowfit's test RMSE must be no
    worse than that by more than 5% (relative)."""
    try:
        from sklearn.datasets import load_diabetes
        from sklearn.neural_network import MLPRegressor
        from sklearn.pipeline import make_pipeline
        from sklearn.preprocessing import StandardScaler
        from sklearn.compose import TransformedTargetRegressor
    except ImportError as e:
        raise AssertionError("needs python3-sklearn: %s" % e)
    X, y = load_diabetes(return_X_y=True, scaled=False)
    names = ["age", "sex", "bmi", "bp", "s1", "s2", "s3", "s4", "s5", "s6"]
    d = make_dir("diabetes")
    tr, te = split_files(d, names, "progression", X, y, 100)
    with open(os.path.join(d, "d.job"), "w") as f:
        f.write("data train.csv\nscore test.csv\ntarget progression\ninputs %s\n"
                "model network\nhidden 4\nridge 10\nsolver lbfgs\nfolds 0\n" % ", ".join(names))
    run = Run(d, "d.job")
    est = score_column(run, "estimate")
    assert len(est) == len(te), "%d test estimates, want %d" % (len(est), len(te))
    ours = math.sqrt(np.mean((est - y[te]) ** 2))
    theirs = []
    for seed in ORACLE_SEEDS:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")   # lbfgs iteration-cap notices
            m = TransformedTargetRegressor(
                regressor=make_pipeline(StandardScaler(), MLPRegressor(
                    hidden_layer_sizes=(4,), activation="tanh", solver="lbfgs",
                    alpha=10.0, max_iter=1000, random_state=seed)),
                transformer=StandardScaler())
            m.fit(X[tr], y[tr])
        theirs.append(math.sqrt(np.mean((m.predict(X[te]) - y[te]) ** 2)))
    med = float(np.median(theirs))
    print("  diabetes test rmse: rowfit %.3f, MLPRegressor seeds 0-4 %s, median %.3f (ratio %.4f)"
          % (ours, " ".join("%.3f" % t for t in theirs), med, ours / med))
    assert ours <= 1.05 * med, "rowfit test rmse %.4f, sklearn median %.4f: worse by %.1f%%" % (
        ours, med, 100 * (ours / med - 1))


@test
def test_reference_classifier_against_sklearn():
    """anes96 (statsmodels.datasets, public domain; see the header): vote
    from nine inputs, 744 training rows, 200 test rows kept aside. rowfit:
    hidden 4, ridge 10, solver lbfgs, positive 1. Oracle: scikit-learn's
    MLPClassifier (hidden_layer_sizes=(4,), activation='tanh', solver
    'lbfgs', alpha=10, max_iter 1000; the same penalised mean log loss),
    StandardScaler on the inputs in a Pipeline. Held-out log loss of
    rowfit no worse than the median over oracle seeds 0-4 by more than 5%
    (relative); the held-out error rate is printed."""
    try:
        import statsmodels.api as sm
        from sklearn.neural_network import MLPClassifier
        from sklearn.pipeline import make_pipeline
        from sklearn.preprocessing import StandardScaler
    except ImportError as e:
        raise AssertionError("needs python3-sklearn and python3-statsmodels: %s" % e)
    df = sm.datasets.anes96.load_pandas().data
    names = ["logpopul", "TVnews", "selfLR", "ClinLR", "DoleLR", "PID", "age", "educ", "income"]
    X = df[names].values.astype(float)
    y = df["vote"].values.astype(int)
    d = make_dir("anes96")
    tr, te = split_files(d, names, "vote", X, y, 200, fmt_y=lambda v: "%d" % v)
    with open(os.path.join(d, "c.job"), "w") as f:
        f.write("data train.csv\nscore test.csv\ntarget vote\npositive 1\ninputs %s\n"
                "model network\nhidden 4\nridge 10\nsolver lbfgs\nfolds 0\n" % ", ".join(names))
    run = Run(d, "c.job")
    p = score_column(run, "probability")
    assert len(p) == len(te), "%d test probabilities, want %d" % (len(p), len(te))
    ours = logloss(y[te], p)
    theirs, errs = [], []
    for seed in ORACLE_SEEDS:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            m = make_pipeline(StandardScaler(), MLPClassifier(
                hidden_layer_sizes=(4,), activation="tanh", solver="lbfgs",
                alpha=10.0, max_iter=1000, random_state=seed)).fit(X[tr], y[tr])
        q = m.predict_proba(X[te])[:, 1]
        theirs.append(logloss(y[te], q))
        errs.append(np.mean((q >= 0.5) != (y[te] == 1)))
    med = float(np.median(theirs))
    print("  anes96 test log loss: rowfit %.4f (error rate %.3f), MLPClassifier median %.4f "
          "(error rates %s), ratio %.4f" % (ours, np.mean((p >= 0.5) != (y[te] == 1)), med,
                                            " ".join("%.3f" % e for e in errs), ours / med))
    assert ours <= 1.05 * med, "rowfit test log loss %.4f, sklearn median %.4f: worse by %.1f%%" % (
        ours, med, 100 * (ours / med - 1))


# ------------------------------------------------------------ determinism

@test
def test_same_job_twice_gives_identical_results():
    """The house demo with `model network` run again into another file:
    every estimate, cv estimate and weight is the same double. Another
    seed gives other weights (so the comparison can tell)."""
    a = house_net()
    b = Run(a.dir, "h.job", out="again.xlsx")
    for col in ("estimate", "cv estimate"):
        ea = [r[col] for r in a.est()]
        eb = [r[col] for r in b.est()]
        assert ea == eb, "%s differs between two runs of the same job" % col
    assert a.weights() == b.weights(), "Weights differ between two runs of the same job"
    with open(os.path.join(a.dir, "h2.job"), "w") as f:
        f.write(demo_job(os.path.join(WB, "house-prices.job"), "network", ["seed 2", "folds 0"]))
    c = Run(a.dir, "h2.job", out="seed2.xlsx")
    assert [r[3] for r in c.weights()[0]] != [r[3] for r in a.weights()[0]], \
        "seed 2 gives the same weights as seed 1"


# ------------------------------------------------------------ bad input

def bad_job(name, extra, rows=60, expect=1):
    """A small numeric job with extra lines; returns (dir, process)."""
    rng = np.random.default_rng(5)
    x1, x2 = rng.normal(size=rows), rng.normal(size=rows)
    d = make_dir(name, {"d.csv": csv_text(["y", "x1", "x2"], [1 + x1 - x2 + rng.normal(size=rows), x1, x2]),
                        "d.job": "data d.csv\ntarget y\ninputs x1, x2\nmodel network\n" + extra})
    p = rowfit(["-q", "d.job"], d)
    assert p.returncode == expect, "%s: %s" % (name, describe(p))
    return d, p


@test
def test_bad_hidden_and_restarts_are_refused():
    """hidden 0, a layer over the limit (1000 units), more than 4 layers,
    restarts over 100 (engine/job.h): exit 1, the job file's line named,
    the limit stated, no workbook."""
    for name, extra, words in (
            ("h0", "hidden 0\n", ["1 to %d units" % UNITS_MAX, "'0'"]),
            ("hbig", "hidden %d\n" % (UNITS_MAX + 1), ["1 to %d units" % UNITS_MAX, str(UNITS_MAX + 1)]),
            ("hdeep", "hidden " + ", ".join(["2"] * (LAYERS_MAX + 1)) + "\n", ["at most %d layers" % LAYERS_MAX]),
            ("rbig", "restarts %d\n" % (RESTARTS_MAX + 1), [str(RESTARTS_MAX)]),
            ("hlinear", "", None)):
        if words is None:   # hidden on a linear model
            d = make_dir(name, {"d.csv": "y,x\n1,2\n2,3\n3,5\n4,4\n",
                                "d.job": "data d.csv\ntarget y\ninputs x\nmodel linear\nhidden 4\n"})
            p = rowfit(["-q", "d.job"], d)
            assert p.returncode == 1, "hidden on model linear: %s" % describe(p)
            assert "d.job:5" in p.stderr and "network" in p.stderr, "hidden on linear: %r" % p.stderr
        else:
            d, p = bad_job(name, extra)
            assert "d.job:5:" in p.stderr, "%s: message does not name d.job:5: %r" % (name, p.stderr)
            for w in words:
                assert w in p.stderr, "%s: message lacks %r: %r" % (name, w, p.stderr)
        assert not [f for f in os.listdir(d) if f.endswith(".xlsx")], "%s: a workbook was written" % name


@test
def test_few_rows_for_the_weights_warns_with_counts():
    """30 rows, 2 inputs, hidden 8: (2+1) x 8 + (8+1) = 33 weights, fewer
    than 10 rows a weight (common practice; engine/fit.c): a warning with
    both counts, on stderr and in the Job sheet; the job still runs. A
    network with enough rows gets no such warning."""
    d, p = bad_job("few", "hidden 8\nfolds 0\n", rows=30, expect=0)
    want = "the network has %d weights to learn from %d fitted rows" % ((2 + 1) * 8 + (8 + 1), 30)
    assert want in p.stderr, "no warning %r in %r" % (want, p.stderr)
    wb = openpyxl.load_workbook(os.path.join(d, "d-results.xlsx"), data_only=True)
    job = [r[0] for r in wb["Job"].iter_rows(values_only=True) if isinstance(r[0], str)]
    assert any(want in t for t in job), "the warning is not in the Job sheet"
    # 2 inputs, hidden 2: 9 weights; 100 rows is more than 10 a weight
    _, p = bad_job("enough", "hidden 2\nfolds 0\n", rows=100, expect=0)
    assert "weights to learn" not in p.stderr, "warning with 100 rows for 9 weights: %r" % p.stderr


@test
def test_non_finite_loss_stops_with_a_message():
    """solver adam with rate 1e300: the training loss overflows; rowfit
    stops with exit 1 and a message naming the job, saying the loss became
    non-finite and pointing at the rate; no workbook is left."""
    d, p = bad_job("nan", "solver adam\nrate 1e300\nfolds 0\n")
    msg = p.stderr
    assert "d.job:" in msg and "non-finite" in msg and "rate" in msg, "message %r" % msg
    # the place is the `rate` line (line 6 of d.job), the thing to change
    assert "d.job:6:" in msg, "message %r does not point at the rate line" % msg
    assert not [f for f in os.listdir(d) if f.endswith(".xlsx") or f.startswith(".")], \
        "files left behind: %r" % os.listdir(d)


if __name__ == "__main__":
    main(T, TMP)
