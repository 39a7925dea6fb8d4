#!/usr/bin/python3
"""rowfit end to end: runs the binary on small invented data (house sales of
the fictional Alder County) and reads the workbook it writes with openpyxl
(Debian's python3-openpyxl, used only as an independent .xlsx reader).

Oracle for the numbers: an exact least-squares solution computed here with
exact rational arithmetic (fractions.Fraction on the normal equations), so
on small data it has no rounding error at all; rowfit must agree to 1e-9
relative. Names of sheets, columns and labels come from the contract
(shared/spec/contract.md section 3, mirrored in docs/).

The bad-input corpus: every tests/bad/*.job is run in a temporary copy of
tests/bad/. Comment lines in the job say what must happen:
  # expect: TEXT   stderr contains TEXT (case-insensitive); one or more
  # exit: N        the exit status (default 1)
  # place: TEXT    stderr names this place; without it, stderr must name a
                   place NAME:LINE (or a cell, ...]!D17)
and nothing may be written.

ROWFIT_KEEP_TMP=1 keeps the temporary folder.
Usage: ROWFIT=./rowfit python3 tests/e2e/test_e2e.py [NAME-FRAGMENT...]
Prints PASS/FAIL per test and `N passed, M failed`; exits 1 on a failure.
"""
import glob
import hashlib
import math
import os
import re
import shutil
import subprocess
import sys
import tempfile
from fractions import Fraction

sys.dont_write_bytecode = True  # keep the source tree clean
sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from common import (REPO, ROWFIT, Runner, close, describe, load,  # noqa: E402
                    main, make_dir, records, rowfit, snapshot, table, value)

T = Runner()
test = T.test
TMP = tempfile.mkdtemp(prefix="rowfit-e2e-")

# ---------------------------------------------------------------- the data

# Invented sales; line numbers matter (header = line 1). Line 8's parcel
# starts with '=' (must come back as text), line 13 has a blank bathrooms,
# line 18 an age of 'n/a', lines 19-20 no price yet (to be estimated).
SALES = """\
parcel,price,bathrooms,sqft,district,age,office
AC-1017,162300,1.5,1186,Oakmere,13,North
AC-1030,245050,3,1814,Oakmere,9,North
AC-1043,147350,1.5,1103,"Hollow Creek",7,South
AC-1056,199050,3,1490,Hollow Creek,17,South
AC-1069,346550,1.5,3194,Oakmere,15,North
AC-1082,208000,3,1299,Riverside,10,South
=1+2,179750,2.5,1743,Hollow Creek,70,North
AC-1108,296100,2,2381,Riverside,33,South
AC-1121,186950,1,1899,Oakmere,75,North
AC-1134,308900,2,2738,Riverside,79,North
AC-1147,199050,3,1383,Riverside,55,South
AC-1160,306650,,2627,Oakmere,11,North
AC-1173,222100,2,2293,Oakmere,78,South
AC-1186,141700,2,1283,Hollow Creek,62,North
AC-1199,112150,2,1148,Oakmere,84,South
AC-1212,235300,2.5,2065,Oakmere,46,North
AC-1225,330300,2,2791,Riverside,n/a,South
AC-1238,,2,1650,Oakmere,21,North
AC-1251,,1.5,2210,Riverside,40,South
"""

LISTINGS = """\
parcel,sqft,bathrooms,age,district
L-301,1720,2,12,Oakmere
L-302,2480,2.5,30,Hollow Creek
L-303,1350,1,64,Riverside
"""

JOB = """\
# Spring sales, Alder County (invented data for rowfit's tests)
job spring
data sales.csv
score listings.csv
target price
derive sqft_k = sqft / 1000
inputs sqft_k, bathrooms, age
categories district
id parcel
model linear
folds 0
"""

SKIP_BATH = "skipped: bathrooms is blank"
SKIP_AGE = "skipped: age is 'n/a', not a number"
REFERENCE = "Oakmere"           # the most frequent district
LEVELS = ["Riverside", "Hollow Creek"]
TERMS = ["(intercept)", "sqft_k", "bathrooms", "age"] + \
        ["district: " + lv for lv in LEVELS]
# Contract section 3 order, then (docs/workbook.md) the plain columns that
# derived inputs read, so the derived cells can be live formulas: sqft_k is
# derived from sqft.
EST_COLUMNS = ["source", "row", "parcel", "price", "estimate", "residual",
               "low", "high", "status", "sqft_k", "bathrooms", "age",
               "district", "sqft"]
COEF_COLUMNS = ["term", "estimate", "std error", "t", "p value", "low", "high"]
SUMMARY_LABELS = ["model", "target", "rows read", "rows fitted",
                  "rows skipped", "rows estimated", "terms", "r squared",
                  "adjusted r squared", "residual std error", "rmse", "mae",
                  "f statistic", "f p value", "residual df", "aic", "bic"]
# Student t, 0.975 quantile, 9 degrees of freedom: 2.262 in the NIST/SEMATECH
# e-Handbook of Statistical Methods, table 1.3.6.7.2; 2.2621571628 to more
# digits from GSL's gsl_cdf_tdist_Pinv (Debian libgsl, shared/spec/libraries.md).
T975_DF9 = 2.2621571628


def parse_csv(text):
    """A minimal parser for the CSV above (quotes only around whole fields)."""
    lines = text.splitlines()
    head = lines[0].split(",")
    out = []
    for n, line in enumerate(lines[1:], start=2):
        cells = [c[1:-1] if c.startswith('"') else c for c in line.split(",")]
        out.append((n, dict(zip(head, cells))))
    return out


def design_row(r):
    """The model row for a record (exact), or None when a cell is unusable."""
    try:
        sqft_k = Fraction(r["sqft"]) / 1000
        bath = Fraction(r["bathrooms"])
        age = Fraction(r["age"])
    except ValueError:
        return None
    return [Fraction(1), sqft_k, bath, age] + \
           [Fraction(int(r["district"] == lv)) for lv in LEVELS]


def solve_exact(A, b):
    """Gauss-Jordan in exact rationals; A square and non-singular."""
    p = len(A)
    M = [list(row) + [rhs] for row, rhs in zip(A, b)]
    for k in range(p):
        piv = next(i for i in range(k, p) if M[i][k] != 0)
        M[k], M[piv] = M[piv], M[k]
        for i in range(p):
            if i != k and M[i][k] != 0:
                f = M[i][k] / M[k][k]
                M[i] = [x - f * y for x, y in zip(M[i], M[k])]
    return [M[k][p] / M[k][k] for k in range(p)]


def ols_exact(X, y):
    """Least squares by exact rational arithmetic on the normal equations.
    Returns beta, (X'X)^-1 and the residual sum of squares, all exact."""
    p = len(X[0])
    XtX = [[sum(r[a] * r[b] for r in X) for b in range(p)] for a in range(p)]
    Xty = [sum(r[a] * yi for r, yi in zip(X, y)) for a in range(p)]
    beta = solve_exact(XtX, Xty)
    inv_cols = [solve_exact(XtX, [Fraction(int(i == j)) for i in range(p)])
                for j in range(p)]
    inv = [[inv_cols[j][i] for j in range(p)] for i in range(p)]
    rss = sum((yi - sum(b * x for b, x in zip(beta, r))) ** 2
              for r, yi in zip(X, y))
    return beta, inv, rss


def sha256(path):
    with open(path, "rb") as f:
        return hashlib.sha256(f.read()).hexdigest()


def house_dir(name):
    return make_dir(TMP, name, {"sales.csv": SALES, "listings.csv": LISTINGS,
                                "spring.job": JOB})


# The main run is shared by the tests that read its workbook.
_MAIN = {}


def main_run():
    if not _MAIN:
        d = house_dir("main")
        p = rowfit(["-q", "spring.job"], d)
        out = os.path.join(d, "spring-results.xlsx")
        assert p.returncode == 0, "rowfit spring.job: " + describe(p)
        assert os.path.exists(out), "spring-results.xlsx not written beside the job"
        _MAIN.update(dir=d, proc=p, path=out, wb=load(out),
                     wbv=__import__("openpyxl").load_workbook(out, data_only=True))
        train = parse_csv(SALES)
        fit = [(n, r) for n, r in train if r["price"] and design_row(r)]
        X = [design_row(r) for _, r in fit]
        y = [Fraction(r["price"]) for _, r in fit]
        beta, inv, rss = ols_exact(X, y)
        _MAIN.update(train=train, score=parse_csv(LISTINGS), fit=fit, X=X,
                     y=y, beta=beta, inv=inv, rss=rss)
    if "wb" not in _MAIN:
        raise AssertionError("the main run failed earlier")
    return _MAIN


def predict(m, r):
    x = design_row(r)
    est = sum(b * xi for b, xi in zip(m["beta"], x))
    lev = sum(x[i] * m["inv"][i][j] * x[j]
              for i in range(len(x)) for j in range(len(x)))
    n, p = len(m["X"]), len(x)
    s2 = m["rss"] / (n - p)
    half = T975_DF9 * math.sqrt(float(s2 * (1 + lev)))
    return float(est), half


# ------------------------------------------------------------ the workbook

@test
def test_linear_job_writes_sheets_in_contract_order():
    m = main_run()
    names = m["wb"].sheetnames
    # Contract section 3: Estimates, Coefficients, Summary, Validation only
    # with folds > 0 (this job has `folds 0`), Diagnostics for linear and
    # logistic fits, then Job last. tests/e2e/test_validation.py checks
    # the sheets of a job with folds.
    assert names == ["Estimates", "Coefficients", "Summary", "Diagnostics", "Job"], \
        "sheets %r" % names


@test
def test_summary_has_two_charts_over_estimates_columns():
    # openpyxl drops charts when it reads, so look in the package itself
    # (ECMA-376 part 1: charts are parts xl/charts/chartN.xml).
    import zipfile
    m = main_run()
    with zipfile.ZipFile(m["path"]) as z:
        charts = sorted(n for n in z.namelist() if n.startswith("xl/charts/chart"))
        assert len(charts) == 2, "chart parts %r" % charts
        xml = z.read(charts[0]).decode()
        # target (D, after the id column C) against estimate (E)
        assert "Estimates!$E$2" in xml and "Estimates!$D$2" in xml, xml[:400]
        xml = z.read(charts[1]).decode()
        assert "Estimates!$F$2" in xml, "residual column F not plotted"


@test
def test_estimates_columns_in_contract_order():
    head, _ = table(main_run()["wb"], "Estimates")
    assert head == EST_COLUMNS, "Estimates header %r, want %r" % (head, EST_COLUMNS)


@test
def test_estimates_rows_training_first_then_score_with_line_numbers():
    m = main_run()
    got = [(value(r["source"]), value(r["row"])) for r in records(m["wb"], "Estimates")]
    want = [("data", n) for n, _ in m["train"]] + [("score", n) for n, _ in m["score"]]
    assert got == want, "rows %r, want %r" % (got, want)


@test
def test_estimates_status_says_fitted_estimated_or_why_skipped():
    m = main_run()
    rows = records(m["wbv"], "Estimates")
    want = {}
    for n, r in m["train"]:
        if not r["bathrooms"]:
            want[("data", n)] = SKIP_BATH
        elif r["age"] == "n/a":
            want[("data", n)] = SKIP_AGE
        else:
            want[("data", n)] = "fitted" if r["price"] else "estimated"
    for n, _ in m["score"]:
        want[("score", n)] = "estimated"
    for r in rows:
        key = (value(r["source"]), value(r["row"]))
        assert value(r["status"]) == want.get(key), \
            "%s line %s: status %r, want %r" % (key[0], key[1], value(r["status"]), want.get(key))
        if value(r["status"]).startswith("skipped"):
            assert value(r["estimate"]) is None, "skipped row %r has an estimate" % (key,)


@test
def test_estimates_copy_id_target_and_inputs_as_used():
    m = main_run()
    rows = records(m["wbv"], "Estimates")
    src = [r for _, r in m["train"]] + [r for _, r in m["score"]]
    assert len(rows) == len(src), "%d rows, want %d" % (len(rows), len(src))
    for got, r in zip(rows, src):
        where = "%s line %s" % (value(got["source"]), value(got["row"]))
        assert value(got["parcel"]) == r["parcel"], "%s: parcel %r" % (where, value(got["parcel"]))
        price = value(got["price"])
        if r.get("price"):
            assert price == float(r["price"]), "%s: price %r" % (where, price)
        else:
            assert price is None, "%s: price %r should be blank" % (where, price)
        if str(value(got["status"])).startswith("skipped"):
            # After an unusable cell a skipped row's inputs may be left
            # blank; what is shown must still be the row's own value.
            d = value(got["district"])
            assert d in (None, r["district"]), "%s: district %r" % (where, d)
            continue
        assert value(got["district"]) == r["district"], "%s: district %r" % (where, value(got["district"]))
        if design_row(r):
            assert close(value(got["sqft_k"]), float(r["sqft"]) / 1000, 1e-12), \
                "%s: sqft_k %r" % (where, value(got["sqft_k"]))
            assert value(got["bathrooms"]) == float(r["bathrooms"]), "%s: bathrooms" % where
            assert value(got["age"]) == float(r["age"]), "%s: age" % where


@test
def test_estimates_match_exact_fit_and_intervals():
    m = main_run()
    rows = records(m["wbv"], "Estimates")
    src = [r for _, r in m["train"]] + [r for _, r in m["score"]]
    scale = max(float(v) for v in m["y"])
    checked = 0
    for got, r in zip(rows, src):
        status = value(got["status"])
        if status not in ("fitted", "estimated"):
            continue
        where = "%s line %s" % (value(got["source"]), value(got["row"]))
        est, half = predict(m, r)
        e, lo, hi = value(got["estimate"]), value(got["low"]), value(got["high"])
        assert close(e, est, 1e-9), "%s: estimate %r, exact %r" % (where, e, est)
        assert lo < e < hi, "%s: low %r, estimate %r, high %r" % (where, lo, e, hi)
        # t quantile known to 11 digits, so 1e-8 relative on the half-width.
        assert close(hi - e, half, 1e-8) and close(e - lo, half, 1e-8), \
            "%s: interval half-widths %r, %r; want %r" % (where, hi - e, e - lo, half)
        if status == "fitted":
            res = value(got["residual"])
            assert close(e + res, float(r["price"]), 1e-12, scale), \
                "%s: estimate + residual = %r, price %s" % (where, e + res, r["price"])
        else:
            assert value(got["residual"]) is None, "%s: residual should be blank" % where
        checked += 1
    assert checked == 15 + 2 + 3, "checked %d rows" % checked


@test
def test_numbers_are_numbers_and_formula_like_text_is_text():
    m = main_run()
    found = False
    cached = records(m["wbv"], "Estimates")
    for r, rv in zip(records(m["wb"], "Estimates"), cached):
        status = str(r["status"].value)
        for col in ("row", "estimate", "residual", "low", "high", "price",
                    "bathrooms", "age", "sqft_k"):
            c = r[col]
            if c is None or c.value is None:
                continue
            if c.data_type == "f":
                # A live formula (a derive, an estimate from the
                # Coefficients cells) is fine when it carries its number
                # as the cached value, for readers that do not recalculate.
                v = rv[col].value
                assert isinstance(v, (int, float)) and not isinstance(v, bool), \
                    "Estimates %s%d (%s) is a formula with cached value %r" % (
                        c.column_letter, c.row, col, v)
                continue
            if status.startswith("skipped") and col in ("bathrooms", "age"):
                continue  # the unusable cell may be copied as it was
            assert c.data_type == "n", "Estimates %s%d (%s) is %r of type %r" % (
                c.column_letter, c.row, col, c.value, c.data_type)
        if r["parcel"].value == "=1+2" or r["parcel"].data_type == "f":
            assert r["parcel"].data_type == "s" and r["parcel"].value == "=1+2", \
                "parcel '=1+2' came back as %r (type %r)" % (r["parcel"].value, r["parcel"].data_type)
            found = True
    assert found, "the parcel '=1+2' is missing"
    for r in records(m["wb"], "Coefficients"):
        for col in COEF_COLUMNS[1:]:
            c = r.get(col)
            assert c is not None and c.data_type == "n", \
                "Coefficients %s of %r is %r" % (col, r["term"].value, c and c.value)
    for r in records(m["wb"], "Summary"):
        if r["measure"].value in SUMMARY_LABELS[2:]:
            assert r["value"].data_type == "n", "Summary %r is %r (type %r)" % (
                r["measure"].value, r["value"].value, r["value"].data_type)


@test
def test_coefficients_columns_and_terms():
    head, _ = table(main_run()["wb"], "Coefficients")
    # contract section 3: a linear fit's Coefficients gains `vif`, before
    # the note
    assert head == COEF_COLUMNS + ["vif", "note"], "Coefficients header %r" % head
    terms = [value(r["term"]) for r in records(main_run()["wb"], "Coefficients")]
    assert sorted(terms) == sorted(TERMS), "terms %r, want %r" % (terms, TERMS)
    assert terms[:4] == TERMS[:4], "intercept and inputs not first, in job order: %r" % terms
    assert "district: " + REFERENCE not in terms, "the reference level got a term"


@test
def test_coefficients_match_exact_least_squares():
    m = main_run()
    rows = {value(r["term"]): r for r in records(m["wbv"], "Coefficients")}
    n, p = len(m["X"]), len(TERMS)
    s2 = m["rss"] / (n - p)
    for k, term in enumerate(TERMS):
        r = rows[term]
        b = float(m["beta"][k])
        se = math.sqrt(float(s2 * m["inv"][k][k]))
        est, got_se, t = value(r["estimate"]), value(r["std error"]), value(r["t"])
        assert close(est, b, 1e-9), "%s: estimate %r, exact %r" % (term, est, b)
        assert close(got_se, se, 1e-9), "%s: std error %r, exact %r" % (term, got_se, se)
        assert close(t, b / se, 1e-9), "%s: t %r, want %r" % (term, t, b / se)
        assert close(value(r["high"]) - est, T975_DF9 * se, 1e-8) and \
            close(est - value(r["low"]), T975_DF9 * se, 1e-8), \
            "%s: low/high %r/%r not estimate -+ t(0.975, 9) * se" % (term, value(r["low"]), value(r["high"]))
        note = str(value(r["note"]) or "").lower()
        assert not any(w in note for w in ("collinear", "constant", "dropped")), \
            "%s: note %r" % (term, value(r["note"]))
    # p values: in [0, 1], and a larger |t| never has a larger p (the t
    # distribution's two-sided tail is decreasing in |t|: common practice).
    pairs = [(abs(value(r["t"])), value(r["p value"])) for r in rows.values()]
    for at, pv in pairs:
        assert 0 <= pv <= 1, "p value %r" % pv
    for a in pairs:
        for b in pairs:
            if a[0] > b[0]:
                assert a[1] <= b[1], "|t| %r has p %r, but |t| %r has p %r" % (a + b)


@test
def test_summary_labels_and_values_match_exact_fit():
    m = main_run()
    head, _ = table(m["wbv"], "Summary")
    assert head[:2] == ["measure", "value"], "Summary header %r" % head
    s = {value(r["measure"]): value(r["value"]) for r in records(m["wbv"], "Summary")}
    missing = [lb for lb in SUMMARY_LABELS if lb not in s]
    assert not missing, "Summary lacks %r" % missing
    n, p = len(m["X"]), len(TERMS)
    y = m["y"]
    ybar = sum(y) / n
    tss = sum((yi - ybar) ** 2 for yi in y)
    rss = m["rss"]
    r2 = 1 - rss / tss
    resid = [yi - sum(b * x for b, x in zip(m["beta"], r)) for r, yi in zip(m["X"], y)]
    want = {
        "r squared": float(r2),
        "adjusted r squared": float(1 - (1 - r2) * (n - 1) / (n - p)),
        "residual std error": math.sqrt(float(rss / (n - p))),
        "rmse": math.sqrt(float(rss / n)),        # root of the mean square: common practice
        "mae": float(sum(abs(e) for e in resid) / n),
        "f statistic": float(((tss - rss) / (p - 1)) / (rss / (n - p))),
        "residual df": n - p,
        "terms": p,
        "rows fitted": 15,
        "rows skipped": 2,
        "rows estimated": 2 + 3,
    }
    for label, w in want.items():
        assert close(s[label], w, 1e-9), "%s %r, exact %r" % (label, s[label], w)
    assert s["model"] == "linear" and s["target"] == "price", \
        "model %r, target %r" % (s["model"], s["target"])
    assert s["rows read"] == s["rows fitted"] + s["rows skipped"] + s["rows estimated"] == 22, \
        "rows read %r is not fitted + skipped + estimated = 22" % s["rows read"]
    assert 0 <= s["f p value"] < 1e-3, "f p value %r (F = %r)" % (s["f p value"], s["f statistic"])
    # BIC - AIC = k (ln n - 2) > 0 for n >= 8 under either convention for
    # the log likelihood's constant (common practice).
    assert s["bic"] > s["aic"], "bic %r not above aic %r" % (s["bic"], s["aic"])


@test
def test_job_sheet_holds_job_text_and_input_hashes():
    m = main_run()
    ws = m["wbv"]["Job"]
    text = "\n".join(str(c.value) for row in ws.iter_rows() for c in row
                     if c.value is not None)
    for line in JOB.splitlines():
        assert line.strip() in text, "Job sheet lacks the job line %r" % line
    for f in ("sales.csv", "listings.csv"):
        h = sha256(os.path.join(m["dir"], f))
        assert h in text.lower(), "Job sheet lacks the SHA-256 of %s (%s)" % (f, h)


# --------------------------------------------------- collinear and constant

COLL = """\
parcel,price,sqft,sqft_double,bathrooms,lot
B-01,151200,1210,2420,1.5,0.25
B-02,198400,1655,3310,2,0.25
B-03,243900,2080,4160,2.5,0.25
B-04,176350,1432,2864,1,0.25
B-05,289100,2615,5230,3,0.25
B-06,211750,1890,3780,2,0.25
B-07,163800,1302,2604,2,0.25
B-08,257600,2240,4480,2.5,0.25
B-09,139950,1045,2090,1,0.25
B-10,226300,1977,3954,3,0.25
"""


@test
def test_collinear_and_constant_inputs_keep_their_rows_with_a_note():
    d = make_dir(TMP, "collinear", {"coll.csv": COLL, "coll.job":
                                    "data coll.csv\ntarget price\n"
                                    "inputs sqft, sqft_double, bathrooms, lot\n"
                                    "model linear\nfolds 0\n"})
    p = rowfit(["-q", "coll.job"], d)
    assert p.returncode == 0, "collinear job: " + describe(p)
    wb = load(os.path.join(d, "coll-results.xlsx"))
    rows = {value(r["term"]): r for r in records(wb, "Coefficients")}
    assert set(rows) == {"(intercept)", "sqft", "sqft_double", "bathrooms", "lot"}, \
        "terms %r" % sorted(rows)
    lot = rows["lot"]
    assert value(lot["estimate"]) is None, "constant lot has estimate %r" % value(lot["estimate"])
    assert "constant" in str(value(lot["note"])).lower(), "lot note %r" % value(lot["note"])
    dropped = [t for t in ("sqft", "sqft_double") if value(rows[t]["estimate"]) is None]
    assert len(dropped) == 1, "of sqft and sqft_double, dropped %r" % dropped
    kept = "sqft_double" if dropped == ["sqft"] else "sqft"
    note = str(value(rows[dropped[0]]["note"])).lower()
    assert "collinear" in note, "%s note %r" % (dropped[0], note)
    # The kept terms equal the exact fit without the dropped columns.
    data = parse_csv(COLL)
    X = [[Fraction(1), Fraction(r[kept]), Fraction(r["bathrooms"])] for _, r in data]
    y = [Fraction(r["price"]) for _, r in data]
    beta, _, _ = ols_exact(X, y)
    for term, b in zip(["(intercept)", kept, "bathrooms"], beta):
        got = value(rows[term]["estimate"])
        assert close(got, float(b), 1e-9), "%s: %r, exact %r" % (term, got, float(b))


# -------------------------------------------------------------- file rules

@test
def test_running_twice_replaces_its_own_workbook():
    d = house_dir("twice")
    p = rowfit(["-q", "spring.job"], d)
    assert p.returncode == 0, "first run: " + describe(p)
    with open(os.path.join(d, "spring.job"), "a") as f:
        f.write("# second run\n")
    p = rowfit(["-q", "spring.job"], d)
    assert p.returncode == 0, "second run: " + describe(p)
    wb = load(os.path.join(d, "spring-results.xlsx"))
    text = " ".join(str(c.value) for row in wb["Job"].iter_rows() for c in row)
    assert "# second run" in text, "the workbook was not replaced by the second run"


@test
def test_unrelated_file_at_output_is_refused_without_force():
    d = house_dir("force")
    out = os.path.join(d, "spring-results.xlsx")
    with open(out, "w") as f:
        f.write("someone's own notes, not a rowfit workbook\n")
    before = snapshot(d)
    p = rowfit(["-q", "spring.job"], d)
    assert p.returncode == 1, "without --force: " + describe(p)
    assert p.stderr.startswith("rowfit: "), "stderr %r" % p.stderr
    assert snapshot(d) == before, "files changed: %r" % snapshot(d)
    p = rowfit(["-q", "--force", "spring.job"], d)
    assert p.returncode == 0, "with --force: " + describe(p)
    assert "Estimates" in load(out).sheetnames, "--force did not write the workbook"


@test
def test_output_option_chooses_the_path():
    d = house_dir("dash-o")
    os.mkdir(os.path.join(d, "elsewhere"))
    out = os.path.join(d, "elsewhere", "custom name.xlsx")
    p = rowfit(["-q", "-o", out, "spring.job"], d)
    assert p.returncode == 0, "-o: " + describe(p)
    assert os.path.exists(out), "no workbook at the -o path"
    assert not os.path.exists(os.path.join(d, "spring-results.xlsx")), \
        "-o also wrote the default workbook"
    assert "Coefficients" in load(out).sheetnames


@test
def test_input_files_are_never_modified():
    d = house_dir("inputs")
    files = ["sales.csv", "listings.csv", "spring.job"]
    before = {f: sha256(os.path.join(d, f)) for f in files}
    for args in (["-q", "spring.job"], ["-q", "spring.job"],
                 ["check", "spring.job"], ["-q", "--force", "spring.job"]):
        rowfit(args, d)
    # An output aimed at the input itself must be refused, not written.
    p = rowfit(["-q", "--force", "-o", "sales.csv", "spring.job"], d)
    assert p.returncode != 0, "-o sales.csv (an input) was accepted"
    after = {f: sha256(os.path.join(d, f)) for f in files}
    assert before == after, "changed: %r" % [f for f in files if before[f] != after[f]]


@test
def test_check_writes_nothing_and_exits_0():
    d = house_dir("check")
    before = snapshot(d)
    p = rowfit(["check", "spring.job"], d)
    assert p.returncode == 0, "check: " + describe(p)
    assert snapshot(d) == before, "check wrote or changed files: %r" % \
        sorted(set(snapshot(d)) ^ set(before))


# ------------------------------------------------------------ command line

@test
def test_version_prints_a_version_and_exits_0():
    p = rowfit(["--version"], TMP)
    assert p.returncode == 0, describe(p)
    assert re.search(r"\d+\.\d+", p.stdout), "stdout %r" % p.stdout


def products_line(p):
    line = [l for l in p.stdout.splitlines() if l.startswith("products:")]
    assert line, "no products line in %r" % p.stdout
    m = re.match(r"products: OpenBLAS, (\S+) kernels$", line[0])
    assert m, line[0]
    return m.group(1)


def cpu_flags():
    """The processor's feature flags from /proc/cpuinfo (Linux's proc(5));
    none where the file has no flags line (not x86)."""
    with open("/proc/cpuinfo") as f:
        line = next((l for l in f if l.startswith("flags")), "flags:")
    return set(line.split(":", 1)[1].split())


def without_coretype():
    return {k: v for k, v in os.environ.items() if k != "OPENBLAS_CORETYPE"}


@test
def test_version_names_kernels_that_the_processor_can_run():
    # Debian 12's OpenBLAS falls back to its SSE3 "Prescott" kernels on
    # processors newer than it (seen on an AVX-512 Xeon, family 6 model
    # 207; engine/blascore.c); rowfit then restarts itself with
    # OPENBLAS_CORETYPE, so the kernels it names are never the SSE3 ones
    # on a processor with AVX.
    p = subprocess.run([ROWFIT, "--version"], cwd=TMP, capture_output=True,
                       text=True, timeout=60, env=without_coretype())
    assert p.returncode == 0, describe(p)
    name = products_line(p)
    if "avx" in cpu_flags():
        assert name.lower() != "prescott", \
            "OpenBLAS runs its SSE3 kernels on a processor with AVX"


@test
def test_a_run_through_the_program_loader_is_not_restarted():
    # started as `ld.so rowfit`, /proc/self/exe is the loader, which must
    # not be run again in rowfit's place (the path is Debian's for
    # x86-64: the ELF interpreter that rowfit names)
    loader = "/lib64/ld-linux-x86-64.so.2"
    if not os.path.exists(loader):
        return
    p = subprocess.run([loader, ROWFIT, "--version"], cwd=TMP,
                       capture_output=True, text=True, timeout=60,
                       env=without_coretype())
    assert p.returncode == 0, describe(p)
    assert p.stdout.startswith("rowfit "), p.stdout[:200]


@test
def test_a_users_openblas_coretype_is_kept():
    env = dict(os.environ, OPENBLAS_CORETYPE="Prescott")
    p = subprocess.run([ROWFIT, "--version"], cwd=TMP, capture_output=True,
                       text=True, timeout=60, env=env)
    assert p.returncode == 0, describe(p)
    assert products_line(p) == "Prescott", p.stdout


@test
def test_help_exits_0():
    p = rowfit(["--help"], TMP)
    assert p.returncode == 0, describe(p)
    assert "check" in p.stdout and "-o" in p.stdout, "help text %r" % p.stdout[:300]


@test
def test_unknown_option_exits_2():
    p = rowfit(["--no-such-option", "x.job"], TMP)
    assert p.returncode == 2, describe(p)
    assert p.stderr.startswith("rowfit: "), "stderr %r" % p.stderr


@test
def test_no_arguments_exits_2():
    p = rowfit([], TMP)
    assert p.returncode == 2, describe(p)
    assert p.stderr.startswith("rowfit: "), "stderr %r" % p.stderr


@test
def test_output_option_with_two_jobs_exits_2():
    d = house_dir("two-jobs")
    shutil.copy(os.path.join(d, "spring.job"), os.path.join(d, "autumn.job"))
    before = snapshot(d)
    p = rowfit(["-o", "both.xlsx", "spring.job", "autumn.job"], d)
    assert p.returncode == 2, describe(p)
    assert p.stderr.startswith("rowfit: "), "stderr %r" % p.stderr
    assert snapshot(d) == before, "files written: %r" % sorted(set(snapshot(d)) - set(before))


# --------------------------------------------------------- bad-input corpus

PLACE = re.compile(r"[\w.-]+:\d+|\]![A-Z]+\d+")


def bad_case(job):
    """One tests/bad/*.job: exit 1 (or its `# exit: N`), every `# expect:`
    fragment in stderr (case-insensitive), a place NAME:LINE (or, where no
    line can be named, the text of its `# place: TEXT`), nothing written."""
    with open(job, encoding="utf-8", errors="replace") as f:
        text = f.read()
    expects = [m.strip() for m in re.findall(r"^#\s*expect:(.*)$", text, re.M)]
    m = re.search(r"^#\s*exit:\s*(\d)\s*$", text, re.M)
    status = int(m.group(1)) if m else 1
    m = re.search(r"^#\s*place:(.*)$", text, re.M)
    place = m.group(1).strip() if m else None
    assert expects, "%s has no '# expect:' line" % os.path.basename(job)
    d = os.path.join(TMP, "bad-" + os.path.basename(job))
    shutil.copytree(os.path.dirname(job), d)
    before = snapshot(d)
    p = rowfit(["-q", os.path.basename(job)], d)
    assert p.returncode == status, "want exit %d: %s" % (status, describe(p))
    assert p.stderr.startswith("rowfit: "), "stderr %r" % p.stderr
    for e in expects:
        assert e.lower() in p.stderr.lower(), "stderr %r lacks %r" % (p.stderr.strip(), e)
    if place:
        assert place in p.stderr, "stderr %r lacks the place %r" % (p.stderr.strip(), place)
    elif status == 1:
        assert PLACE.search(p.stderr), "stderr %r names no place (NAME:LINE)" % p.stderr.strip()
    written = sorted(set(snapshot(d)) - set(before))
    assert not written, "files written: %r" % written
    shutil.rmtree(d, ignore_errors=True)


def add_bad_corpus():
    jobs = sorted(glob.glob(os.path.join(REPO, "tests", "bad", "*.job")))
    if not jobs:
        def test_bad_corpus_exists():
            raise AssertionError("no tests/bad/*.job found")
        test(test_bad_corpus_exists)
    for job in jobs:
        def case(job=job):
            bad_case(job)
        case.__name__ = "test_bad_input_" + os.path.basename(job)[:-4].replace("-", "_")
        test(case)


add_bad_corpus()


if __name__ == "__main__":
    main(T, TMP)
