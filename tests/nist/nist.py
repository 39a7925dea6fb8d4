#!/usr/bin/python3
"""NIST StRD linear least squares: rowfit against the certified values.

Source of the reference values: the eleven linear datasets of the NIST/ITL
Statistical Reference Datasets (StRD), copied in this folder (README.md says
where from). For each set this writes the data block as a CSV, a job file
(raw powers of x via `derive` for the polynomial sets, `intercept no` for
NoInt1/2), runs rowfit, reads the workbook with openpyxl (Debian's
python3-openpyxl, used here only as an independent reader of the .xlsx) and
prints the log relative error (LRE, defined in README.md) of every
coefficient, standard error, the residual standard deviation and R-squared.

Requirement: LRE >= 9 on every value of every set (README.md allows 8 for
Filip's standard errors; we hold 9). Each set is run a second time with CRLF line endings
in its CSV (README.md suggests testing them); the results must be identical.

Usage: ROWFIT=./rowfit python3 tests/nist/nist.py [SET...]
Exit status 0 when every value passes, 1 otherwise.
"""
import math
import os
import re
import shutil
import subprocess
import sys
import tempfile


def need_openpyxl():
    """openpyxl comes from Debian's python3-openpyxl; a python3 earlier on
    PATH (a virtualenv, pyenv) may not see it, so fall back to Debian's."""
    try:
        import openpyxl  # noqa: F401
    except ImportError:
        deb = "/usr/bin/python3"
        if (os.path.exists(deb) and
                os.path.realpath(sys.executable) != os.path.realpath(deb) and
                not os.environ.get("ROWFIT_TEST_REEXEC")):
            os.environ["ROWFIT_TEST_REEXEC"] = "1"
            os.execv(deb, [deb] + sys.argv)
        sys.exit("nist.py: needs python3-openpyxl (apt-get install python3-openpyxl)")


need_openpyxl()
import openpyxl  # noqa: E402

HERE = os.path.dirname(os.path.abspath(__file__))
SETS = ["Norris", "Pontius", "NoInt1", "NoInt2", "Filip", "Longley",
        "Wampler1", "Wampler2", "Wampler3", "Wampler4", "Wampler5"]
DEGREE = {"Pontius": 2, "Filip": 10, "Wampler1": 5, "Wampler2": 5,
          "Wampler3": 5, "Wampler4": 5, "Wampler5": 5}
NO_INTERCEPT = {"NoInt1", "NoInt2"}
LRE_CAP = 15.0   # the certified values carry 15 significant digits
REQUIRED = 9.0   # README.md
REQUIRED_FILIP_SE = 9.0  # the README allows 8; issue 2 asks 9 of every value, and we hold it

# A number as NIST writes it: 1.5, .11019, 760., -0.3E-02, Infinity.
NUM = r"[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?|[-+]?Infinity"


def parse_dat(path):
    """Returns (certified, names, rows): certified is a dict with 'B' (a list
    of (index, estimate, sd)), 'sd' and 'r2'; names the data block's
    variable names (y first); rows lists of number tokens as written."""
    with open(path, encoding="ascii") as f:
        lines = f.read().splitlines()
    coefs, sd, r2 = [], None, None
    data_at = None
    for i, line in enumerate(lines):
        m = re.match(r"^\s*B(\d+)\s+(%s)\s+(%s)\s*$" % (NUM, NUM), line)
        if m:
            coefs.append((int(m.group(1)), float(m.group(2)), float(m.group(3))))
            continue
        m = re.match(r"^\s*Standard Deviation\s+(%s)\s*$" % NUM, line)
        if m and sd is None:
            sd = float(m.group(1))
            continue
        m = re.match(r"^\s*R-Squared\s+(%s)\s*$" % NUM, line)
        if m and r2 is None:
            r2 = float(m.group(1))
        if line.startswith("Data:"):
            data_at = i  # the last "Data:" line heads the data block
    if not coefs or sd is None or r2 is None or data_at is None:
        raise ValueError("%s: certified values or data block not found" % path)
    names = lines[data_at].split()[1:]
    rows = []
    for line in lines[data_at + 1:]:
        toks = line.split()
        if not toks:
            continue  # whitespace-only lines (Norris ends with one)
        if len(toks) != len(names):
            raise ValueError("%s: data row %r has %d fields, expected %d"
                             % (path, line, len(toks), len(names)))
        for t in toks:
            if not re.fullmatch(NUM, t):
                raise ValueError("%s: %r is not a number" % (path, t))
        rows.append(toks)
    return {"B": coefs, "sd": sd, "r2": r2}, names, rows


def term_name(name, k, names):
    """The rowfit term for NIST's coefficient Bk."""
    if name in NO_INTERCEPT:
        return "x"          # y = B1 x
    if k == 0:
        return "(intercept)"
    if name in DEGREE:
        return "x" if k == 1 else "x%d" % k
    return names[k]          # Longley: B1..B6 are x1..x6, Norris: x


def write_job(name, names, rows, folder, newline):
    """Writes NAME.csv and NAME.job into folder; returns the job path."""
    with open(os.path.join(folder, name + ".csv"), "w", newline="") as f:
        f.write(",".join(names) + newline)
        for r in rows:
            f.write(",".join(r) + newline)
    inputs = list(names[1:])
    job = ["# NIST StRD %s (tests/nist/nist.py)" % name,
           "data %s.csv" % name,
           "target y",
           "model linear",
           "folds 0"]
    if name in DEGREE:
        for d in range(2, DEGREE[name] + 1):
            job.append("derive x%d = x^%d" % (d, d))
            inputs.append("x%d" % d)
    if name in NO_INTERCEPT:
        job.append("intercept no")
    job.append("inputs " + ", ".join(inputs))
    path = os.path.join(folder, name + ".job")
    with open(path, "w") as f:
        f.write("\n".join(job) + "\n")
    return path


def sheet_rows(wb, sheet):
    """The sheet as a list of dicts keyed by the header row's names."""
    ws = wb[sheet]
    rows = list(ws.iter_rows(values_only=True))
    if not rows:
        raise ValueError("sheet %s is empty" % sheet)
    head = [str(h) if h is not None else "" for h in rows[0]]
    return [dict(zip(head, r)) for r in rows[1:]]


def read_results(path):
    """(coefficients by term, summary by measure, all sheet values)."""
    wb = openpyxl.load_workbook(path, read_only=False, data_only=False)
    coefs = {r["term"]: r for r in sheet_rows(wb, "Coefficients")}
    summary = {r["measure"]: r["value"] for r in sheet_rows(wb, "Summary")}
    everything = {s: [list(r) for r in wb[s].iter_rows(values_only=True)]
                  for s in ("Estimates", "Coefficients", "Summary")}
    return coefs, summary, everything


def lre(est, cert):
    """Log relative error (README.md), capped at LRE_CAP."""
    if est is None or isinstance(est, str):
        return None
    est = float(est)
    if not math.isfinite(est):
        return None
    if est == cert:
        return LRE_CAP
    if cert == 0:
        v = -math.log10(abs(est))
    else:
        v = -math.log10(abs(est - cert) / abs(cert))
    return min(v, LRE_CAP)


def run_rowfit(rowfit, job):
    p = subprocess.run([rowfit, "-q", os.path.basename(job)],
                       cwd=os.path.dirname(job), capture_output=True,
                       text=True, timeout=60)
    return p.returncode, p.stderr


def check_set(rowfit, name, tmp):
    """Runs one set (LF, then CRLF); prints its lines; returns (passed, failed)."""
    cert, names, rows = parse_dat(os.path.join(HERE, name + ".dat"))
    results = []
    for tag, nl in (("lf", "\n"), ("crlf", "\r\n")):
        folder = os.path.join(tmp, name + "-" + tag)
        os.mkdir(folder)
        job = write_job(name, names, rows, folder, nl)
        rc, err = run_rowfit(rowfit, job)
        out = os.path.join(folder, name + "-results.xlsx")
        if rc != 0 or not os.path.exists(out):
            print("NIST %s (%s) rowfit failed: exit %d, %s" %
                  (name, tag.upper(), rc, err.strip() or "no workbook"))
            return 0, 1
        if err.strip():
            print("NIST %s (%s) rowfit said: %s" % (name, tag.upper(), err.strip()))
        results.append(read_results(out))

    coefs, summary, _ = results[0]
    passed = failed = 0
    worst = (LRE_CAP + 1, "")

    def report(label, est, certv, need):
        nonlocal passed, failed, worst
        v = lre(est, certv)
        ok = v is not None and v >= need
        shown = "n/a" if v is None else "%.1f" % v
        extra = "" if ok else " (rowfit %r, certified %r, need %.0f)" % (est, certv, need)
        print("NIST %s %s LRE %s %s%s" % (name, label, shown, "PASS" if ok else "FAIL", extra))
        if ok:
            passed += 1
        else:
            failed += 1
        key = -1.0 if v is None else v
        if key < worst[0]:
            worst = (key, label)

    for k, est, sd in cert["B"]:
        term = term_name(name, k, names)
        row = coefs.get(term)
        if row is None:
            print("NIST %s B%d term %r missing from Coefficients FAIL" % (name, k, term))
            failed += 2
            continue
        report("B%d estimate" % k, row.get("estimate"), est, REQUIRED)
        need = REQUIRED_FILIP_SE if name == "Filip" else REQUIRED
        report("B%d std error" % k, row.get("std error"), sd, need)
    extra_terms = set(coefs) - {term_name(name, k, names) for k, _, _ in cert["B"]}
    if extra_terms:
        print("NIST %s unexpected terms %s FAIL" % (name, sorted(extra_terms)))
        failed += 1
    report("residual std error", summary.get("residual std error"), cert["sd"], REQUIRED)
    report("r squared", summary.get("r squared"), cert["r2"], REQUIRED)

    if results[0][2] == results[1][2]:
        print("NIST %s CRLF data gives identical Estimates, Coefficients, Summary PASS" % name)
        passed += 1
    else:
        print("NIST %s CRLF data gives different results FAIL" % name)
        failed += 1
    print("NIST %s minimum LRE %s (%s) %s" %
          (name, "n/a" if worst[0] < 0 else "%.1f" % worst[0], worst[1],
           "PASS" if failed == 0 else "FAIL"))
    return passed, failed


def main(argv):
    rowfit = os.path.abspath(os.environ.get("ROWFIT", "./rowfit"))
    if not os.access(rowfit, os.X_OK):
        print("nist.py: no rowfit at %s (set ROWFIT)" % rowfit, file=sys.stderr)
        return 1
    sets = argv[1:] or SETS
    passed = failed = 0
    tmp = tempfile.mkdtemp(prefix="rowfit-nist-")
    try:
        for name in sets:
            try:
                p, f = check_set(rowfit, name, tmp)
            except (ValueError, KeyError, OSError, subprocess.SubprocessError) as e:
                print("NIST %s error: %s FAIL" % (name, e))
                p, f = 0, 1
            passed += p
            failed += f
    finally:
        shutil.rmtree(tmp, ignore_errors=True)
    print("%d passed, %d failed" % (passed, failed))
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
