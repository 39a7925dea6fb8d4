"""Shared helpers for rowfit's end-to-end tests (tests/e2e/*.py).

Reads the result workbook with openpyxl (Debian's python3-openpyxl, used
only as an independent reader of the .xlsx that rowfit writes), runs the
rowfit binary named by $ROWFIT (default ./rowfit), and offers a tiny test
runner that prints `PASS name` / `FAIL name: why` and a closing line of the
form `N passed, M failed`.
"""
import os
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


def rowfit(args, cwd, timeout=60):
    """Runs rowfit with args in cwd; returns the CompletedProcess (text)."""
    return subprocess.run([ROWFIT] + list(args), cwd=cwd, capture_output=True,
                          text=True, timeout=timeout, stdin=subprocess.DEVNULL)


def describe(p):
    return "exit %d, stderr %r" % (p.returncode, p.stderr.strip()[:400])


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


def value(cell):
    return None if cell is None else cell.value


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
