#!/usr/bin/env python3
"""`rowfit peek` and format detection, end to end (contract section 1:
`rowfit peek FILE [SHEET]` lists a spreadsheet's sheets; with SHEET, its
columns: name, kind, blanks, first values). Fixtures: tests/data (made by
LibreOffice and python3-openpyxl, see tests/data/README.md) and the demo CSV.
"""
import os
import shutil
import sys
import tempfile

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import common  # noqa: E402

R = common.Runner()
DATA = os.path.join(common.REPO, "tests", "data")


def peek(*args):
    return common.rowfit(["peek"] + list(args), cwd=common.REPO)


@R.test
def test_peek_lists_the_sheets_of_each_workbook_format():
    for f, sheets in (("xlsx-types.xlsx", ["Sales", "Größe €"]),
                      ("ods-sheets.ods", ["Summary", "Année 2025", "Ventes détaillées"]),
                      ("xls-sheets.xls", ["Sales 2024", "Größe ÄÖÜ", "Notes"])):
        p = peek(os.path.join(DATA, f))
        assert p.returncode == 0, common.describe(p)
        assert "%d sheets" % len(sheets) in p.stdout, p.stdout
        for i, s in enumerate(sheets, 1):
            line = [l for l in p.stdout.splitlines() if s in l]
            assert line and line[0].split()[0] == str(i), (s, p.stdout)


@R.test
def test_peek_shows_a_sheets_columns_with_kind_blanks_and_values():
    p = peek(os.path.join(DATA, "xlsx-types.xlsx"), "Sales")
    assert p.returncode == 0, common.describe(p)
    rows = {l.split()[0]: l for l in p.stdout.splitlines()[2:] if l.strip()}
    assert rows["price"].split()[1:3] == ["number", "1"], rows["price"]
    assert rows["sold"].split()[1] == "date", rows["sold"]
    assert "2024-01-01" in rows["sold"], rows["sold"]
    assert rows["garage"].split()[1] == "yes-no", rows["garage"]
    assert "#N/A" in rows["check"], rows["check"]
    # the sheet by number gives the same text
    q = peek(os.path.join(DATA, "xlsx-types.xlsx"), "1")
    assert q.stdout == p.stdout


@R.test
def test_peek_on_csv_shows_its_columns():
    p = peek(os.path.join(common.REPO, "workbooks", "house-sales.csv"))
    assert p.returncode == 0, common.describe(p)
    assert p.stdout.startswith(os.path.join(common.REPO, "workbooks",
                                            "house-sales.csv") + ": 3000 rows, 10 columns")
    line = [l for l in p.stdout.splitlines() if l.split()[:1] == ["bathrooms"]][0]
    assert line.split()[1:3] == ["number", "5"], line


@R.test
def test_peek_wrong_sheet_lists_the_sheets_and_exits_1():
    p = peek(os.path.join(DATA, "ods-sheets.ods"), "Ventes")
    assert p.returncode == 1, common.describe(p)
    assert "has no sheet 'Ventes'; its sheets are: 'Summary', 'Année 2025'" in p.stderr, p.stderr
    assert p.stderr.startswith("rowfit: "), p.stderr


@R.test
def test_peek_missing_file_exits_1_and_bad_usage_exits_2():
    p = peek("/nonexistent/rowfit/sales.xlsx")
    assert p.returncode == 1 and "no such file" in p.stderr, common.describe(p)
    p = peek()
    assert p.returncode == 2, common.describe(p)
    p = peek("a", "b", "c")
    assert p.returncode == 2, common.describe(p)


@R.test
def test_a_workbook_with_a_csv_name_is_read_as_a_workbook_with_a_warning():
    tmp = tempfile.mkdtemp(prefix="rowfit-peek-")
    try:
        f = os.path.join(tmp, "sales.csv")
        shutil.copy(os.path.join(DATA, "xlsx-types.xlsx"), f)
        p = peek(f)
        assert p.returncode == 0, common.describe(p)
        assert "an .xlsx workbook with 2 sheets" in p.stdout, p.stdout
        assert "warning: the file's name says otherwise, but it is an .xlsx workbook" in p.stderr, p.stderr
    finally:
        shutil.rmtree(tmp, ignore_errors=True)


if __name__ == "__main__":
    sys.exit(R.run(sys.argv[1:]))
