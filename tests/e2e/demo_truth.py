#!/usr/bin/python3
"""rowfit's demo against the truth it was drawn from.

workbooks/gen-houses writes invented house sales from a known linear model
(house-sales.truth: each true coefficient, and sigma). For 40 seeds this
generates the data, runs the demo job (workbooks/house-prices.job, copied
beside the data) and reads each Coefficients sheet with openpyxl (Debian's
python3-openpyxl, only as an independent .xlsx reader).

Checks:
- Coverage of the 95% confidence intervals (low, high) over all terms x
  seeds lies in the 99.9% acceptance band of Binomial(N, 0.95), computed
  exactly here with math.comb. (Terms of one seed are fitted together, so
  their hits are mildly dependent; the band is a sanity bound, not a
  sharp test.) And per term, over the 40 independent seeds, coverage is not
  below the 0.01% lower tail of Binomial(40, 0.95).
- The residual std error averaged over seeds is within 2% of sigma: one
  seed's estimate has relative sd about 1 / sqrt(2 (n - p)) (common
  practice), so for n = 600 the mean of 40 has sd about 0.5%.

Env: ROWFIT (default ./rowfit), GEN (default build/gen-houses; when that is
missing, workbooks/gen-houses.c is compiled into a temporary folder).
Prints PASS/FAIL lines and `N passed, M failed`; exits 1 on a failure.
"""
import math
import os
import shutil
import subprocess
import sys
import tempfile

sys.dont_write_bytecode = True  # keep the source tree clean
sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from common import REPO, ROWFIT, describe, load, records, rowfit, value  # noqa: E402

SEEDS = range(1, 41)
ROWS = 600        # sales per seed: enough for stable fits, quick to run
LISTINGS = 20
LEVEL = 0.95
BAND = 0.999      # the acceptance band's probability


def binom_cdf(k, n, p):
    """P(K <= k) for K ~ Binomial(n, p), exactly (math.comb), as a float."""
    return sum(math.comb(n, i) * p ** i * (1 - p) ** (n - i) for i in range(k + 1))


def binom_band(n, p, prob):
    """The central interval [lo, hi] of Binomial(n, p) with each tail
    outside it at most (1 - prob) / 2."""
    tail = (1 - prob) / 2
    lo = 0
    while binom_cdf(lo, n, p) <= tail:  # P(K < lo + 1) <= tail: raise lo
        lo += 1
    hi = n
    while hi > 0 and 1 - binom_cdf(hi - 1, n, p) <= tail:  # P(K > hi - 1) <= tail
        hi -= 1
    return lo, hi


def read_truth(path):
    truth, sigma = {}, None
    with open(path) as f:
        for line in f:
            line = line.strip()
            if not line:
                continue
            term, v = line.rsplit(None, 1)
            if term == "sigma":
                sigma = float(v)
            else:
                truth[term] = float(v)
    return truth, sigma


def find_gen(tmp):
    gen = os.path.abspath(os.environ.get("GEN", os.path.join(REPO, "build", "gen-houses")))
    if os.access(gen, os.X_OK):
        return gen
    if "GEN" in os.environ:
        raise SystemExit("demo_truth.py: GEN=%s is not an executable" % gen)
    gen = os.path.join(tmp, "gen-houses")
    cc = os.environ.get("CC", "cc")
    p = subprocess.run([cc, "-O2", "-std=c11", "-o", gen,
                        os.path.join(REPO, "workbooks", "gen-houses.c"),
                        "-lgsl", "-lopenblas", "-lm"], capture_output=True, text=True)
    if p.returncode != 0:
        raise SystemExit("demo_truth.py: cannot build workbooks/gen-houses.c: " + p.stderr)
    print("(built %s from workbooks/gen-houses.c)" % gen)
    return gen


def main():
    if not os.access(ROWFIT, os.X_OK):
        print("demo_truth.py: no rowfit at %s (set ROWFIT)" % ROWFIT)
        print("0 passed, 1 failed")
        return 1
    tmp = tempfile.mkdtemp(prefix="rowfit-demo-")
    passed = failed = 0

    def result(ok, text):
        nonlocal passed, failed
        print("%s %s" % ("PASS" if ok else "FAIL", text))
        if ok:
            passed += 1
        else:
            failed += 1

    try:
        gen = find_gen(tmp)
        job_src = os.path.join(REPO, "workbooks", "house-prices.job")
        hits, total = {}, {}
        ratios = []
        for seed in SEEDS:
            d = os.path.join(tmp, "seed%d" % seed)
            os.mkdir(d)
            g = subprocess.run([gen, "--seed", str(seed), "--rows", str(ROWS),
                                "--listings", str(LISTINGS), "--out", d],
                               capture_output=True, text=True, timeout=60)
            if g.returncode != 0:
                result(False, "seed %d: gen-houses exit %d: %s" % (seed, g.returncode, g.stderr.strip()))
                continue
            shutil.copy(job_src, d)
            try:
                p = rowfit(["-q", "house-prices.job"], d)
            except (OSError, subprocess.SubprocessError) as e:
                result(False, "seed %d: cannot run rowfit: %s" % (seed, e))
                continue
            out = os.path.join(d, "house-prices-results.xlsx")
            if p.returncode != 0 or not os.path.exists(out):
                result(False, "seed %d: rowfit %s" % (seed, describe(p)))
                continue
            truth, sigma = read_truth(os.path.join(d, "house-sales.truth"))
            wb = load(out)
            coefs = {value(r["term"]): r for r in records(wb, "Coefficients")}
            summary = {value(r["measure"]): value(r["value"]) for r in records(wb, "Summary")}
            missing = sorted(set(truth) - set(coefs))
            if missing:
                result(False, "seed %d: terms %r missing from Coefficients" % (seed, missing))
                continue
            for term, b in truth.items():
                lo, hi = value(coefs[term]["low"]), value(coefs[term]["high"])
                total[term] = total.get(term, 0) + 1
                hits[term] = hits.get(term, 0) + (1 if lo is not None and lo <= b <= hi else 0)
            rse = summary.get("residual std error")
            if isinstance(rse, (int, float)) and sigma:
                ratios.append(rse / sigma)
            shutil.rmtree(d, ignore_errors=True)

        n = sum(total.values())
        k = sum(hits.values())
        if n:
            lo, hi = binom_band(n, LEVEL, BAND)
            result(lo <= k <= hi,
                   "coverage of the %g%% intervals: %d of %d (%.3f); %g%% band of "
                   "Binomial(%d, %g) is %d..%d" % (100 * LEVEL, k, n, k / n, 100 * BAND,
                                                   n, LEVEL, lo, hi))
            for term in sorted(total):
                m = total[term]
                floor = 0
                while binom_cdf(floor, m, LEVEL) <= 1e-4:
                    floor += 1
                result(hits[term] >= floor,
                       "term %r covered %d of %d (at least %d: the 0.01%% tail of "
                       "Binomial(%d, %g))" % (term, hits[term], m, floor, m, LEVEL))
        else:
            result(False, "no seed produced a workbook")
        if ratios:
            mean = sum(ratios) / len(ratios)
            result(abs(mean - 1) <= 0.02,
                   "residual std error / sigma averages %.4f over %d seeds (want 1 +- 0.02)"
                   % (mean, len(ratios)))
    finally:
        shutil.rmtree(tmp, ignore_errors=True)
    print("%d passed, %d failed" % (passed, failed))
    return 1 if failed or not passed else 0


if __name__ == "__main__":
    sys.exit(main())
