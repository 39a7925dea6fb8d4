#!/usr/bin/python3
"""Makes the .ods fixtures of tests/test_ods.c and their CSV twins.

Each workbook is written first as an .xlsx by python3-openpyxl or, where the
.xlsx route cannot carry a cell type (LibreOffice imports an .xlsx boolean
as the formula =TRUE() with a number value), as a flat OpenDocument file
(.fods) written here; then LibreOffice headless (Debian package
libreoffice-calc-nogui) converts it to .ods, so every committed .ods is
LibreOffice's own output:

    soffice --headless --convert-to ods FILE --outdir tests/data

The CSV twin of a sheet holds the same cells as rowfit's CSV reader reads
them (numbers in full precision, dates as ISO 8601, yes-no as TRUE/FALSE,
errors as the text they show). All data is invented.

Run from the top folder: /usr/bin/python3 tests/data/make_ods_fixtures.py
"""
import csv
import datetime as dt
import os
import shutil
import subprocess
import sys
import tempfile

import openpyxl
from openpyxl.styles import PatternFill

HERE = os.path.dirname(os.path.abspath(__file__))


def twin(name, rows):
    with open(os.path.join(HERE, name), "w", newline="",
              encoding="utf-8") as f:
        w = csv.writer(f, lineterminator="\n")
        for r in rows:
            w.writerow(["" if v is None else v for v in r])


def num(v):
    return repr(float(v)) if isinstance(v, float) else str(v)


def types_book(tmp):
    """Every value type the .xlsx route gives: numbers, percentages,
    currency, dates, date-times, times, text with runs of spaces and two
    paragraphs, error formulas, formulas with cached values."""
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Sales"
    head = ["price", "share", "fee", "sold", "listed", "viewing", "note",
            "check", "double"]
    ws.append(head)
    data = [
        (231500.0, 0.25, 1234.5, dt.date(2026, 3, 15),
         dt.datetime(2026, 1, 7, 13, 45), dt.time(12, 30), "quiet  street",
         "=1/0", "=A2*2"),
        (187250.75, 0.125, 980.25, dt.date(2025, 11, 2),
         dt.datetime(2025, 10, 1, 8, 0, 30), dt.time(9, 15, 45),
         "two\nlines", "=NA()", "=A3*2"),
        (-42.5, 1.5, 0.0, dt.date(1900, 3, 1),
         dt.datetime(2024, 2, 29, 23, 59, 59), dt.time(0, 0, 1),
         "wide   gap   text", "=SQRT(-1)", "=A4*2"),
        (3.0e-7, -0.0425, 1e15, dt.date(9999, 12, 31),
         dt.datetime(2000, 1, 1), dt.time(23, 59, 59), "Grüße, 東京",
         '="ok"', "=A5*2"),
    ]
    for r, row in enumerate(data, start=2):
        ws.append(list(row))
        ws.cell(r, 2).number_format = "0.00%"
        ws.cell(r, 3).number_format = '"$"#,##0.00'
        ws.cell(r, 4).number_format = "yyyy-mm-dd"
        ws.cell(r, 5).number_format = "yyyy-mm-dd hh:mm:ss"
        ws.cell(r, 6).number_format = "hh:mm:ss"
    wb.save(os.path.join(tmp, "ods-types.xlsx"))
    errors = ["#DIV/0!", "#N/A", "Err:502", "ok"]

    def iso(d):
        if isinstance(d, dt.datetime):
            return d.strftime("%Y-%m-%d %H:%M:%S") if d.second or d.minute \
                or d.hour else d.strftime("%Y-%m-%d")
        return d.strftime("%Y-%m-%d")
    rows = [head]
    for (p, s, f, d1, d2, t, note, _e, _dbl), err in zip(data, errors):
        secs = t.hour * 3600 + t.minute * 60 + t.second
        rows.append([num(p), num(s), num(f), iso(d1), iso(d2),
                     repr(secs / 86400.0), note, err, num(p * 2)])
    twin("ods-types.csv", rows)


FODS_HEAD = """<?xml version="1.0" encoding="UTF-8"?>
<office:document xmlns:office="urn:oasis:names:tc:opendocument:xmlns:office:1.0"
 xmlns:table="urn:oasis:names:tc:opendocument:xmlns:table:1.0"
 xmlns:text="urn:oasis:names:tc:opendocument:xmlns:text:1.0"
 xmlns:dc="http://purl.org/dc/elements/1.1/"
 xmlns:of="urn:oasis:names:tc:opendocument:xmlns:of:1.2"
 xmlns:style="urn:oasis:names:tc:opendocument:xmlns:style:1.0"
 xmlns:number="urn:oasis:names:tc:opendocument:xmlns:datastyle:1.0"
 office:version="1.3" office:mimetype="application/vnd.oasis.opendocument.spreadsheet">
<office:automatic-styles>
 <number:boolean-style style:name="Nbool"><number:boolean/></number:boolean-style>
 <number:time-style style:name="Ntime" number:truncate-on-overflow="false">
  <number:hours number:style="long"/><number:text>:</number:text>
  <number:minutes number:style="long"/><number:text>:</number:text>
  <number:seconds number:style="long"/></number:time-style>
 <style:style style:name="ceb" style:family="table-cell" style:data-style-name="Nbool"/>
 <style:style style:name="cet" style:family="table-cell" style:data-style-name="Ntime"/>
</office:automatic-styles>
<office:body><office:spreadsheet>
"""
FODS_TAIL = "</office:spreadsheet></office:body></office:document>\n"


def booleans_book(tmp):
    """Typed booleans, times past a day, runs of spaces, two paragraphs, a
    comment inside a cell (not its value), a cell merged over two rows, a
    string formula."""
    body = """<table:table table:name="Checks">
<table:table-row>
 <table:table-cell office:value-type="string"><text:p>id</text:p></table:table-cell>
 <table:table-cell office:value-type="string"><text:p>passed</text:p></table:table-cell>
 <table:table-cell office:value-type="string"><text:p>hours</text:p></table:table-cell>
 <table:table-cell office:value-type="string"><text:p>remark</text:p></table:table-cell>
 <table:table-cell office:value-type="string"><text:p>zone</text:p></table:table-cell>
</table:table-row>
<table:table-row>
 <table:table-cell office:value-type="float" office:value="1"><text:p>1</text:p></table:table-cell>
 <table:table-cell table:style-name="ceb" office:value-type="boolean" office:boolean-value="true"><text:p>TRUE</text:p></table:table-cell>
 <table:table-cell table:style-name="cet" office:value-type="time" office:time-value="PT36H30M00S"><text:p>36:30:00</text:p></table:table-cell>
 <table:table-cell office:value-type="string"><text:p>a<text:s text:c="3"/>b c</text:p></table:table-cell>
 <table:table-cell table:number-columns-spanned="1" table:number-rows-spanned="2" office:value-type="string"><text:p>north</text:p></table:table-cell>
</table:table-row>
<table:table-row>
 <table:table-cell office:value-type="float" office:value="2"><text:p>2</text:p></table:table-cell>
 <table:table-cell table:style-name="ceb" office:value-type="boolean" office:boolean-value="false"><text:p>FALSE</text:p></table:table-cell>
 <table:table-cell table:style-name="cet" office:value-type="time" office:time-value="PT00H00M30S"><text:p>00:00:30</text:p></table:table-cell>
 <table:table-cell office:value-type="string"><office:annotation><dc:creator>Clerk</dc:creator><text:p>checked by hand</text:p></office:annotation><text:p>line one</text:p><text:p>line two</text:p></table:table-cell>
 <table:covered-table-cell/>
</table:table-row>
<table:table-row>
 <table:table-cell office:value-type="float" office:value="3"><text:p>3</text:p></table:table-cell>
 <table:table-cell table:style-name="ceb" office:value-type="boolean" office:boolean-value="true"><text:p>TRUE</text:p></table:table-cell>
 <table:table-cell table:style-name="cet" office:value-type="time" office:time-value="PT07H45M00S"><text:p>07:45:00</text:p></table:table-cell>
 <table:table-cell table:formula="of:=&quot;x&quot;&amp;&quot;y&quot;" office:value-type="string"><text:p>xy</text:p></table:table-cell>
 <table:table-cell office:value-type="string"><text:p>south</text:p></table:table-cell>
</table:table-row>
</table:table>
"""
    with open(os.path.join(tmp, "ods-booleans.fods"), "w",
              encoding="utf-8") as f:
        f.write(FODS_HEAD + body + FODS_TAIL)
    twin("ods-booleans.csv", [
        ["id", "passed", "hours", "remark", "zone"],
        ["1", "TRUE", repr(36.5 / 24), "a   b c", "north"],
        ["2", "FALSE", repr(30 / 86400.0), "line one\nline two", ""],
        ["3", "TRUE", repr(7.75 / 24), "xy", "south"],
    ])


def header_book(tmp):
    """A title and a note above the header, which is row 4."""
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Listing"
    ws["A1"] = "Ridgeway County sales, spring"
    ws["A2"] = "invented data"
    rows = [["parcel", "area", "rooms", "price"],
            ["R-101", 812.5, 3, 201000],
            ["R-102", 1045.25, 4, 254500.5],
            ["R-103", 640, 2, 158900]]
    for i, r in enumerate(rows):
        for j, v in enumerate(r):
            ws.cell(4 + i, 1 + j, v)
    wb.save(os.path.join(tmp, "ods-header-row4.xlsx"))
    twin("ods-header-row4.csv",
         [["Ridgeway County sales, spring"], ["invented data"], []] +
         [[num(v) if not isinstance(v, str) else v for v in r]
          for r in rows])


def sheets_book(tmp):
    """Three sheets, non-ASCII sheet and column names."""
    wb = openpyxl.Workbook()
    a = wb.active
    a.title = "Summary"
    a.append(["total"])
    a.append([3])
    b = wb.create_sheet("Année 2025")
    rb = [["quartier", "prix €", "surface m²"],
          ["Vieux-Port", 312000, 71.5],
          ["Côte", 287500.5, 64.0],
          ["Söderby", 199999.99, 48.25]]
    for r in rb:
        b.append(r)
    c = wb.create_sheet("Ventes détaillées")
    rc = [["numéro", "größe"], [1, 2.5], [2, 3.75]]
    for r in rc:
        c.append(r)
    wb.save(os.path.join(tmp, "ods-sheets.xlsx"))
    twin("ods-sheets-2.csv",
         [[num(v) if not isinstance(v, str) else v for v in r] for r in rb])
    twin("ods-sheets-3.csv",
         [[num(v) if not isinstance(v, str) else v for v in r] for r in rc])


def sparse_book(tmp):
    """Blank cells inside rows, a blank row, a far column (L), a merged
    header cell over C1:D1, and styled but empty cells far below and to
    the right, which LibreOffice writes as repeated rows and cells."""
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Sparse"
    ws["A1"], ws["B1"], ws["C1"], ws["L1"] = "lot", "size", "place", "far"
    ws.merge_cells("C1:D1")
    cells = {"A2": 1, "B2": 10.5, "C2": "east", "D2": "x1",
             "A3": 2, "D3": "x2", "L3": 99,
             "A5": 4, "B5": 12.25, "L5": -1}
    for k, v in cells.items():
        ws[k] = v
    fill = PatternFill("solid", fgColor="FFFF00")
    for col in "ABCDEFGHIJKLMNOPQR":
        ws[col + "40"].fill = fill   # styled, no value
    ws["Z2000"].fill = fill
    ws.row_dimensions[5000].height = 30
    wb.save(os.path.join(tmp, "ods-sparse.xlsx"))
    grid = [["lot", "size", "place", "", "", "", "", "", "", "", "", "far"]]
    for r in (2, 3, 4, 5):
        row = []
        for col in "ABCDEFGHIJKL":
            v = cells.get(col + str(r))
            row.append("" if v is None else
                       (v if isinstance(v, str) else num(v)))
        grid.append(row)
    twin("ods-sparse.csv", grid)


def bad_package(path, content):
    """A minimal .ods package (mimetype first and stored, manifest,
    content.xml) around a content.xml that is wrong on purpose."""
    import zipfile
    manifest = (
        '<?xml version="1.0" encoding="UTF-8"?>\n'
        '<manifest:manifest xmlns:manifest="urn:oasis:names:tc:'
        'opendocument:xmlns:manifest:1.0" manifest:version="1.2">'
        '<manifest:file-entry manifest:full-path="/" manifest:media-type='
        '"application/vnd.oasis.opendocument.spreadsheet"/>'
        '<manifest:file-entry manifest:full-path="content.xml" '
        'manifest:media-type="text/xml"/></manifest:manifest>\n')
    with zipfile.ZipFile(path, "w") as z:
        z.writestr(zipfile.ZipInfo("mimetype"),
                   "application/vnd.oasis.opendocument.spreadsheet")
        z.writestr("META-INF/manifest.xml", manifest,
                   zipfile.ZIP_DEFLATED)
        z.writestr("content.xml", content, zipfile.ZIP_DEFLATED)


def bad_files():
    """tests/bad/ods-*.ods: hand-made packages (python3 zipfile), since no
    spreadsheet program writes them."""
    bad = os.path.join(os.path.dirname(HERE), "bad")
    doc = ('<?xml version="1.0" encoding="UTF-8"?>\n<office:document-content'
           ' xmlns:office="urn:oasis:names:tc:opendocument:xmlns:office:1.0"'
           ' xmlns:table="urn:oasis:names:tc:opendocument:xmlns:table:1.0"'
           ' xmlns:text="urn:oasis:names:tc:opendocument:xmlns:text:1.0">\n'
           '<office:body><office:spreadsheet><table:table table:name="Sales">'
           '\n<table:table-row><table:table-cell office:value-type="string">'
           '<text:p>price</text:p></table:table-cell><table:table-cell '
           'office:value-type="string"><text:p>area</text:p>'
           '</table:table-cell></table:table-row>\n')
    rows = "".join(
        '<table:table-row><table:table-cell office:value-type="float" '
        'office:value="%d"/><table:table-cell office:value-type="float" '
        'office:value="%d"/></table:table-row>\n' % (150000 + 1000 * i,
                                                    60 + i)
        for i in range(6))
    end = "</table:table></office:spreadsheet></office:body>" \
          "</office:document-content>\n"
    # content.xml cut off inside a cell, as a copy interrupted mid-write
    cut = doc + rows
    bad_package(os.path.join(bad, "ods-malformed.ods"),
                cut[:len(cut) - 40])
    # a DOCTYPE with an entity that expands (a billion-laughs opening)
    dtd = ('<!DOCTYPE office:document-content [\n'
           '<!ENTITY a "aaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaa">\n'
           '<!ENTITY b "&a;&a;&a;&a;&a;&a;&a;&a;&a;&a;&a;&a;&a;&a;&a;&a;">\n'
           ']>\n')
    lines = (doc + rows + end).split("\n", 1)
    bad_package(os.path.join(bad, "ods-doctype.ods"),
                lines[0] + "\n" + dtd + lines[1])


def main():
    soffice = shutil.which("soffice")
    if soffice is None:
        sys.exit("make_ods_fixtures: soffice not found "
                 "(Debian package libreoffice-calc-nogui)")
    with tempfile.TemporaryDirectory() as tmp:
        types_book(tmp)
        booleans_book(tmp)
        header_book(tmp)
        sheets_book(tmp)
        sparse_book(tmp)
        bad_files()
        srcs = sorted(os.path.join(tmp, f) for f in os.listdir(tmp))
        # A private profile: a user's running LibreOffice is not disturbed.
        prof = "-env:UserInstallation=file://" + os.path.join(tmp, "prof")
        subprocess.run([soffice, prof, "--headless", "--convert-to", "ods",
                        "--outdir", HERE] + srcs, check=True,
                       stdout=subprocess.DEVNULL)


if __name__ == "__main__":
    main()
