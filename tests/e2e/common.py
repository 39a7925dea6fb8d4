"""Shared helpers for rowfit's end-to-end tests (tests/e2e/*.py).

Reads the result workbook with openpyxl (Debian's python3-openpyxl, used
only as an independent reader of the .xlsx that rowfit writes), runs the
rowfit binary named by $ROWFIT (default ./rowfit), and offers a tiny test
runner that prints `PASS name` / `FAIL name: why` and a closing line of the
form `N passed, M failed`. Also the small helpers that more than one suite
uses (scratch folders, job text, number checks, the statsmodels oracle, the
AUC by pairs, the suites' main), each defined once here.
"""
import os
import shutil
import subprocess
import sys
import time
import traceback


def need_openpyxl():
    """openpyxl comes from Debian's python3-openpyxl; a python3 earlier on
    PATH (a virtualenv, pyenv) may not see it, so re-run under Debian's."""
    try:
        import openpyxl  # noqa: F401
    except ImportError:
        deb = "/usr/bin/python3"
        if (os.path.exists(deb) and
                os.path.realpath(sys.executable) != os.path.realpath(deb) and
                not os.environ.get("ROWFIT_TEST_REEXEC")):
            os.environ["ROWFIT_TEST_REEXEC"] = "1"
            os.execv(deb, [deb] + sys.argv)
        sys.exit("%s: needs python3-openpyxl (apt-get install python3-openpyxl)"
                 % os.path.basename(sys.argv[0]))


need_openpyxl()
import openpyxl  # noqa: E402

HERE = os.path.dirname(os.path.abspath(__file__))
REPO = os.path.dirname(os.path.dirname(HERE))
ROWFIT = os.path.abspath(os.environ.get("ROWFIT", "./rowfit"))
WB = os.path.join(REPO, "workbooks")


def rowfit(args, cwd, timeout=60):
    """Runs rowfit with args in cwd; returns the CompletedProcess (text)."""
    return subprocess.run([ROWFIT] + list(args), cwd=cwd, capture_output=True,
                          text=True, timeout=timeout, stdin=subprocess.DEVNULL)


def describe(p):
    return "exit %d, stderr %r" % (p.returncode, p.stderr.strip()[:400])


def run_job(d, job, out="result.xlsx", expect=0):
    """Runs `rowfit -q -o out --force job` in folder d and checks its exit
    status is expect, and on 0 that the workbook was written. Returns the
    CompletedProcess and the workbook's path."""
    path = os.path.join(d, out)
    proc = rowfit(["-q", "-o", out, "--force", job], d)
    assert proc.returncode == expect, "rowfit %s: %s" % (job, describe(proc))
    if expect == 0:
        assert os.path.exists(path), "%s: no workbook written" % job
    return proc, path


def load(path):
    # Not read_only: the normal reader keeps each cell's data_type as stored
    # (a text cell holding '=1+2' stays 's', a formula is 'f').
    return openpyxl.load_workbook(path, data_only=False)


def table(wb, sheet):
    """(header names, rows of Cell objects) of a sheet whose row 1 is a header."""
    ws = wb[sheet]
    rows = list(ws.iter_rows())
    assert rows, "sheet %s is empty" % sheet
    head = [c.value for c in rows[0]]
    while head and head[-1] is None:
        head.pop()
    return head, [r[:len(head)] + tuple([None] * (len(head) - len(r)))
                  for r in rows[1:] if any(c.value is not None for c in r)]


def records(wb, sheet):
    """The sheet as a list of dicts name -> Cell (None for a missing cell)."""
    head, rows = table(wb, sheet)
    return [dict(zip(head, r)) for r in rows]


class WorkbookRun:
    """One rowfit run (`run_job`) and its workbook read for cached values;
    the suites add their own readers of the sheets."""

    def __init__(self, d, job, out="result.xlsx", expect=0):
        import openpyxl
        self.dir = d
        self.proc, self.path = run_job(d, job, out, expect)
        if expect != 0:
            return
        self.wb = openpyxl.load_workbook(self.path, data_only=True)

    def rows(self, sheet):
        return list(self.wb[sheet].iter_rows(values_only=True))

    def head(self, sheet):
        h = list(self.rows(sheet)[0])
        while h and h[-1] is None:
            h.pop()
        return h


def summary_measures(wb):
    """measure -> value of a workbook's Summary sheet (the measures block,
    above the first blank row; read wb with data_only=True)."""
    out = {}
    for row in list(wb["Summary"].iter_rows(values_only=True))[1:]:
        if row[0] is None:
            break
        assert row[0] not in out, "Summary measure %r twice" % row[0]
        out[row[0]] = row[1]
    return out


def need_numpy():
    """numpy (Debian's python3-numpy), or a failed run that says so."""
    try:
        import numpy
    except ImportError:  # pragma: no cover
        print("FAIL numpy_installed: needs python3-numpy (Debian's /usr/bin/python3)")
        print("0 passed, 1 failed")
        sys.exit(1)
    return numpy


def value(cell):
    return None if cell is None else cell.value


def oracle():
    """statsmodels (python3-statsmodels) and scipy.stats, test oracles only."""
    try:
        import statsmodels.api as sm
        from scipy import stats
    except ImportError as e:
        raise AssertionError("needs python3-statsmodels and python3-scipy: %s" % e)
    return sm, stats


def make_dir(tmp, name, files=None, copy=()):
    """A fresh folder tmp/name with the given text files (name -> text) and
    copies of files from workbooks/."""
    d = os.path.join(tmp, name)
    os.makedirs(d)
    for fname, text in (files or {}).items():
        with open(os.path.join(d, fname), "w", newline="") as f:
            f.write(text)
    for fname in copy:
        shutil.copy(os.path.join(WB, fname), d)
    return d


def snapshot(d):
    """Every file under d with its size and modification time."""
    out = {}
    for root, _, files in os.walk(d):
        for f in files:
            st = os.stat(os.path.join(root, f))
            out[os.path.relpath(os.path.join(root, f), d)] = (st.st_size, st.st_mtime_ns)
    return out


def strip_job(path, add=()):
    """A job file's directives without comments, plus extra lines."""
    with open(path) as f:
        lines = [ln for ln in f.read().splitlines()
                 if ln.strip() and not ln.lstrip().startswith("#")]
    return "\n".join(lines + list(add)) + "\n"


def is_num(v):
    return isinstance(v, (int, float)) and not isinstance(v, bool)


def rel_err(a, b):
    return abs(a - b) / max(abs(b), 1e-300)


def mann_whitney_auc(p, y):
    """AUC as the Mann-Whitney U / (n1 n0) by counting every (positive,
    negative) pair, ties one half (docs/workbook.md "auc"; Mann & Whitney,
    Ann. Math. Statist. 18 (1947) 50; Hanley & McNeil 1982); nan when a
    class is empty. p and y are numpy arrays, y of 0 and 1."""
    pos, neg = p[y == 1], p[y == 0]
    if len(pos) == 0 or len(neg) == 0:
        return float("nan")
    gt = (pos[:, None] > neg[None, :]).sum()
    eq = (pos[:, None] == neg[None, :]).sum()
    return (gt + 0.5 * eq) / (len(pos) * len(neg))


def close(a, b, rel=1e-9, scale=0.0):
    """|a - b| <= rel * max(|b|, scale): relative, with a floor for values
    near zero whose natural size is scale."""
    return (isinstance(a, (int, float)) and not isinstance(a, bool) and
            abs(a - b) <= rel * max(abs(b), scale))


class Runner:
    """Collects named test functions and runs them in order."""

    def __init__(self):
        self.tests = []

    def test(self, fn):
        self.tests.append(fn)
        return fn

    def run(self, only=None):
        passed = failed = 0
        start = time.time()
        for fn in self.tests:
            name = fn.__name__
            if only and not any(o in name for o in only):
                continue
            try:
                fn()
            except AssertionError as e:
                failed += 1
                tb = traceback.extract_tb(e.__traceback__)[-1]
                why = str(e) or "assert failed at line %d: %s" % (tb.lineno, tb.line)
                print("FAIL %s: %s" % (name, why))
            except Exception as e:  # a crash in a test is a failure, with its cause
                failed += 1
                tb = traceback.extract_tb(e.__traceback__)[-1]
                print("FAIL %s: %s: %s (line %d)" % (name, type(e).__name__, e, tb.lineno))
            else:
                passed += 1
                print("PASS %s" % name)
            sys.stdout.flush()
        print("(%.1f s)" % (time.time() - start))
        print("%d passed, %d failed" % (passed, failed))
        return 1 if failed or not passed else 0


def main(runner, tmp):
    """A suite's main: refuses without the rowfit binary, runs the tests
    named on the command line (all without names) and removes the scratch
    folder tmp unless ROWFIT_KEEP_TMP=1. Exits with the runner's status."""
    name = os.path.basename(sys.argv[0])
    if not os.access(ROWFIT, os.X_OK):
        print("%s: no rowfit at %s (set ROWFIT)" % (name, ROWFIT))
        print("0 passed, 1 failed")
        sys.exit(1)
    try:
        rc = runner.run(sys.argv[1:])
    finally:
        if os.environ.get("ROWFIT_KEEP_TMP") != "1":
            shutil.rmtree(tmp, ignore_errors=True)
    sys.exit(rc)
