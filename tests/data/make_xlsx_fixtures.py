#!/usr/bin/python3
"""make_xlsx_fixtures.py: writes the .xlsx fixtures of tests/test_xlsx.c and
their CSV twins (one per sheet, dates as ISO 8601), into tests/data/.

Three writers, so the reader is checked against files it did not make:
- python3-openpyxl (Debian package) for shared strings, dates in both date
  systems, booleans, error cells, several sheets, non-ASCII names, a header
  below row 1 and sparse cells;
- LibreOffice headless (soffice --headless --convert-to xlsx, Debian
  package libreoffice-calc-nogui) for formulas with cached values: openpyxl
  stores formulas without results, LibreOffice computes and saves them;
- zipfile by hand for what neither writes: inline strings, rich-text runs
  (shared and inline), phonetic runs, cells and rows without r, t="d" and
  t="str" cells, custom date codes, an absolute relationship target.

The data are invented (a fictional county's house sales). Run from the top
folder: /usr/bin/python3 tests/data/make_xlsx_fixtures.py
"""
import csv
import datetime as dt
import os
import shutil
import subprocess
import sys
import tempfile
import zipfile

import openpyxl
from openpyxl.utils.datetime import CALENDAR_MAC_1904

HERE = os.path.dirname(os.path.abspath(__file__))


def out(name):
    return os.path.join(HERE, name)


def iso(v):
    if isinstance(v, dt.datetime):
        if v.hour or v.minute or v.second:
            return v.strftime("%Y-%m-%d %H:%M:%S")
        return v.strftime("%Y-%m-%d")
    if isinstance(v, dt.date):
        return v.strftime("%Y-%m-%d")
    if v is True:
        return "TRUE"
    if v is False:
        return "FALSE"
    if v is None:
        return ""
    return repr(v) if isinstance(v, float) else str(v)


def write_csv(name, rows):
    """rows: lists of Python values, as the sheet shows them from its first
    row (None = blank); blank rows stay blank lines."""
    with open(out(name), "w", newline="", encoding="utf-8") as f:
        w = csv.writer(f, lineterminator="\n")
        for r in rows:
            w.writerow([iso(v) for v in r])


# ---- openpyxl: types, several sheets, non-ASCII, header below row 1 ------

SALES = [
    ["id", "town", "price", "sold", "listed", "garage", "check"],
    [1, "Ashcombe", 245000.5, dt.date(2024, 1, 1), dt.datetime(2023, 11, 20, 9, 30), True, "#N/A"],
    [2, "Brookmere", 189999.25, dt.date(1900, 2, 28), dt.datetime(2023, 12, 1, 14, 5, 30), False, None],
    [3, "Cold Harbour", None, dt.date(1900, 3, 1), None, True, "#DIV/0!"],
    [4, "Ashcombe", 312450.0, dt.date(2026, 3, 15), dt.datetime(2026, 2, 28, 23, 59, 59), None, "#VALUE!"],
    [5, "Dunmore Vale", -0.125, None, dt.datetime(2025, 7, 4, 0, 0, 1), False, "ok"],
]

# Second sheet: a title row, a blank row, the header in row 4, non-ASCII
# names, sparse cells (blank cells inside rows, a blank row inside data).
SIZES = [
    ["Größe der Grundstücke — Ortsteil Süd", None, None, None],
    [None, None, None, None],
    [None, None, None, None],
    ["Straße", "Fläche m²", "Zimmer", "Baujahr"],
    ["Kirchweg 3", 812.75, 4, 1962],
    ["Mühlenstraße 11", None, 3, None],
    [None, None, None, None],
    ["Øster Allé 2", 1200, None, 2001],
    [None, 65.5, 2, 1988],
]


def make_openpyxl():
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Sales"
    for r in SALES:
        ws.append(r)
    for row in ws.iter_rows(min_row=2, min_col=4, max_col=4):
        row[0].number_format = "yyyy-mm-dd"
    for row in ws.iter_rows(min_row=2, min_col=5, max_col=5):
        row[0].number_format = "d mmm yyyy h:mm:ss"
    ws2 = wb.create_sheet("Größe €")
    for r in SIZES:
        ws2.append(r)
    wb.save(out("xlsx-types.xlsx"))
    write_csv("xlsx-types-Sales.csv", SALES)
    write_csv("xlsx-types-Groesse.csv", SIZES[3:])

    # The 1904 date system: the same dates, stored as 1904 serials.
    wb = openpyxl.Workbook()
    wb.epoch = CALENDAR_MAC_1904
    ws = wb.active
    ws.title = "Mac"
    rows = [["when", "amount"],
            [dt.date(2024, 1, 1), 1.5],
            [dt.datetime(1904, 1, 2, 12, 0), 2.5],
            [dt.date(2026, 3, 15), 3.5]]
    for r in rows:
        ws.append(r)
    for row in ws.iter_rows(min_row=2, min_col=1, max_col=1):
        row[0].number_format = "dd/mm/yyyy hh:mm"
    wb.save(out("xlsx-1904.xlsx"))
    write_csv("xlsx-1904.csv", rows)


# ---- LibreOffice: formulas with cached values ---------------------------

FORMULA_ROWS = [
    ["area", "rate", "price", "half", "label", "big", "bad", "missing"],
]
AREAS = [(120.5, 1500.25), (88, 1710.5), (0, 2000.0), (210.25, 1399.75)]


def make_libreoffice():
    soffice = shutil.which("soffice")
    if soffice is None:
        sys.exit("make_xlsx_fixtures.py: soffice not found "
                 "(Debian package libreoffice-calc-nogui)")
    tmp = tempfile.mkdtemp(prefix="rowfit-fixtures-")
    try:
        wb = openpyxl.Workbook()
        ws = wb.active
        ws.title = "Formulas"
        ws.append(FORMULA_ROWS[0])
        rows = [FORMULA_ROWS[0]]
        for i, (a, r) in enumerate(AREAS, start=2):
            ws.append([a, r, "=A%d*B%d" % (i, i), "=C%d/2" % i,
                       '="lot "&A%d' % i, "=C%d>150000" % i,
                       "=B%d/A%d" % (i, i), "=NA()"])
            p = a * r
            label = "lot " + (("%d" % a) if a == int(a) else repr(a))
            rows.append([a, r, p, p / 2, label, p > 150000,
                         "#DIV/0!" if a == 0 else r / a, "#N/A"])
        src = os.path.join(tmp, "xlsx-formulas.xlsx")
        wb.save(src)
        conv = os.path.join(tmp, "out")
        subprocess.run([soffice, "--headless", "--convert-to", "xlsx",
                        "--outdir", conv, src], check=True,
                       stdout=subprocess.DEVNULL, env=dict(
                           os.environ, HOME=tmp))
        shutil.copy(os.path.join(conv, "xlsx-formulas.xlsx"),
                    out("xlsx-formulas.xlsx"))
        write_csv("xlsx-formulas.csv", rows)
    finally:
        shutil.rmtree(tmp, ignore_errors=True)


# ---- by hand: inline strings, rich runs, cells without r ----------------

NS = 'xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main"'
NSR = ('xmlns:r="http://schemas.openxmlformats.org/officeDocument/2006/'
       'relationships"')
REL = "http://schemas.openxmlformats.org/officeDocument/2006/relationships"
PKG = "http://schemas.openxmlformats.org/package/2006/relationships"


def package(path, sheets, sst=None, styles=None, date1904=False,
            absolute=False):
    """sheets: [(name, xml)]. Writes a minimal SpreadsheetML package."""
    ct = ['<?xml version="1.0" encoding="UTF-8"?>',
          '<Types xmlns="http://schemas.openxmlformats.org/package/2006/'
          'content-types">',
          '<Default Extension="rels" ContentType="application/'
          'vnd.openxmlformats-package.relationships+xml"/>',
          '<Default Extension="xml" ContentType="application/xml"/>',
          '<Override PartName="/xl/workbook.xml" ContentType="application/'
          'vnd.openxmlformats-officedocument.spreadsheetml.sheet.main+xml"/>']
    rels = ['<?xml version="1.0" encoding="UTF-8"?>',
            '<Relationships xmlns="%s">' % PKG]
    wb = ['<?xml version="1.0" encoding="UTF-8"?>',
          '<workbook %s %s>' % (NS, NSR),
          '<workbookPr date1904="%s"/>' % ("1" if date1904 else "0"),
          '<sheets>']
    with zipfile.ZipFile(path, "w", zipfile.ZIP_DEFLATED) as z:
        for i, (name, xml) in enumerate(sheets, start=1):
            part = "worksheets/sheet%d.xml" % i
            target = "/xl/" + part if absolute else part
            z.writestr("xl/" + part, xml)
            rels.append('<Relationship Id="rId%d" Type="%s/worksheet" '
                        'Target="%s"/>' % (i, REL, target))
            wb.append('<sheet name="%s" sheetId="%d" r:id="rId%d"/>'
                      % (name, i, i))
        if sst is not None:
            z.writestr("xl/sharedStrings.xml", sst)
            rels.append('<Relationship Id="rIdS" Type="%s/sharedStrings" '
                        'Target="sharedStrings.xml"/>' % REL)
        if styles is not None:
            z.writestr("xl/styles.xml", styles)
            rels.append('<Relationship Id="rIdT" Type="%s/styles" '
                        'Target="./styles.xml"/>' % REL)
        wb.append('</sheets></workbook>')
        rels.append('</Relationships>')
        z.writestr("[Content_Types].xml", "".join(ct) + "</Types>")
        z.writestr("_rels/.rels",
                   '<?xml version="1.0" encoding="UTF-8"?><Relationships '
                   'xmlns="%s"><Relationship Id="rId1" Type="%s/'
                   'officeDocument" Target="xl/workbook.xml"/>'
                   '</Relationships>' % (PKG, REL))
        z.writestr("xl/workbook.xml", "".join(wb))
        z.writestr("xl/_rels/workbook.xml.rels", "".join(rels))


# What the reader gives a formula cell with no saved result (io/xlsx.c,
# XLSX_FORMULA_UNSAVED): G3 of xlsx-hand.xlsx has <f> and no <v>.
FORMULA_UNSAVED = ("#FORMULA: this formula has no saved result (the file "
                   "was written by a program that does not calculate); "
                   "open it in a spreadsheet program and save it")


def make_by_hand():
    sst = ('<?xml version="1.0" encoding="UTF-8"?><sst %s count="4" '
           'uniqueCount="4">'
           '<si><t>street</t></si>'
           '<si><r><rPr><b/></rPr><t>Elm</t></r><r><t xml:space="preserve">'
           ' Row</t></r></si>'
           '<si><t>Kōbe-chō</t><rPh sb="0" eb="2"><t>こうべ</t></rPh></si>'
           '<si><t/></si>'
           '</sst>' % NS)
    # numFmt 164: a date with quoted text; 165: "m" only inside quotes;
    # 166: letters only inside [brackets] and escaped; 14: built-in date.
    styles = ('<?xml version="1.0" encoding="UTF-8"?><styleSheet %s>'
              '<numFmts count="3">'
              '<numFmt numFmtId="164" formatCode="&quot;on &quot;dd/mm/yyyy"/>'
              '<numFmt numFmtId="165" formatCode="0.00&quot; m&#178;&quot;"/>'
              '<numFmt numFmtId="166" formatCode="[Red][$-409]0.0\\h"/>'
              '</numFmts>'
              '<cellStyleXfs count="1"><xf numFmtId="14"/></cellStyleXfs>'
              '<cellXfs count="5"><xf numFmtId="0"/><xf numFmtId="164"/>'
              '<xf numFmtId="165"/><xf numFmtId="166"/><xf numFmtId="14"/>'
              '</cellXfs></styleSheet>' % NS)
    # Row 1: header by shared strings and inline rich text; rows 2-4 mix
    # cells with and without r, rows with and without r.
    sheet = ('<?xml version="1.0" encoding="UTF-8"?>'
             '<worksheet %s %s><dimension ref="A1:G5"/><sheetData>'
             '<row r="1">'
             '<c r="A1" t="s"><v>0</v></c>'
             '<c t="inlineStr"><is><r><t>built</t></r><r><rPr><i/></rPr>'
             '<t>_on</t></r></is></c>'
             '<c t="inlineStr"><is><t>area</t></is></c>'
             '<c t="inlineStr"><is><t>height</t></is></c>'
             '<c t="inlineStr"><is><t>flag</t></is></c>'
             '<c t="inlineStr"><is><t>stamp</t></is></c>'
             '<c t="inlineStr"><is><t>calc</t></is></c>'
             '</row>'
             '<row>'
             '<c t="s"><v>1</v></c>'
             '<c s="1"><v>45292</v></c>'
             '<c s="2"><v>101.5</v></c>'
             '<c s="3"><v>2.75</v></c>'
             '<c t="b"><v>1</v></c>'
             '<c t="d"><v>2026-03-15T12:00:00Z</v></c>'
             '<c t="str"><f>A2&amp;"!"</f><v>Elm Row!</v></c>'
             '</row>'
             '<row r="3">'
             '<c r="A3" t="s"><v>2</v></c>'
             '<c r="B3" s="4"><v>61</v></c>'
             '<c r="E3" t="e"><v>#REF!</v></c>'
             '<c r="F3" t="d"><v>1999-12-31</v></c>'
             '<c r="G3"><f>1/0</f></c>'
             '</row>'
             '<row r="5">'
             '<c r="A5" t="inlineStr"><is><t>Kōbe-chō</t><rPh><t>x</t>'
             '</rPh></is></c>'
             '<c r="C5"><v>1.5E3</v></c>'
             '<c r="D5" t="s"><v>3</v></c>'
             '<c r="E5" t="b"><v>0</v></c>'
             '</row>'
             '</sheetData><mergeCells count="0"/></worksheet>' % (NS, NSR))
    package(out("xlsx-hand.xlsx"), [("Hand", sheet)], sst=sst,
            styles=styles, absolute=True)
    write_csv("xlsx-hand.csv", [
        ["street", "built_on", "area", "height", "flag", "stamp", "calc"],
        ["Elm Row", dt.date(2024, 1, 1), 101.5, 2.75, True,
         dt.datetime(2026, 3, 15, 12, 0), "Elm Row!"],
        ["Kōbe-chō", dt.date(1900, 3, 1), None, None, "#REF!",
         dt.date(1999, 12, 31), FORMULA_UNSAVED],
        [None] * 7,
        ["Kōbe-chō", None, 1500.0, None, False, None, None],
    ])


# ---- tests/bad: packages a reader must refuse ----------------------------

BAD = os.path.join(os.path.dirname(HERE), "bad")

SIMPLE_SHEET = ('<?xml version="1.0" encoding="UTF-8"?><worksheet %s><sheetData>'
                '<row r="1"><c r="A1" t="inlineStr"><is><t>price</t></is></c>'
                '<c r="B1" t="inlineStr"><is><t>area</t></is></c></row>'
                '<row r="2"><c r="A2"><v>1</v></c><c r="B2"><v>2</v></c></row>'
                '</sheetData></worksheet>' % NS)


def patch_size(path, member, size):
    """Makes the local and central headers of member declare size bytes
    uncompressed (PKWARE APPNOTE 4.3.7 offset 22, 4.3.12 offset 24)."""
    import struct
    data = bytearray(open(path, "rb").read())
    name = member.encode()
    i = 0
    found = 0
    while True:
        i = data.find(b"PK", i)
        if i < 0:
            break
        if data[i:i + 4] == b"PK\x03\x04" and data[i + 30:i + 30 + len(name)] == name:
            struct.pack_into("<I", data, i + 22, size)
            found += 1
        elif data[i:i + 4] == b"PK\x01\x02" and data[i + 46:i + 46 + len(name)] == name:
            struct.pack_into("<I", data, i + 24, size)
            found += 1
        i += 2
    assert found == 2, (path, member, found)
    open(path, "wb").write(bytes(data))


def make_unsaved():
    """xlsx-unsaved.xlsx: formulas as openpyxl saves them (no results:
    openpyxl does not calculate), a row holding only formulas, and times
    of day under time-only formats beside a date-time. Checked directly by
    tests/test_xlsx.c (no twin: the formula cells have no value to write)."""
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Times"
    ws.append(["id", "price", "double", "label", "at", "span", "clock",
               "when"])
    ws.append([1, 100.0, "=B2*2", '="lot "&A2', dt.time(12, 0), 1.5, 0.25,
               dt.datetime(2026, 3, 15, 18, 0)])
    ws.append([None, None, "=B2+1", "=A2&A2", None, None, None, None])
    ws.append([2, 50.0, "=B4*2", '="lot "&A4', dt.time(6, 0), 0.75, 0.5,
               dt.datetime(2025, 1, 2, 6, 0)])
    for r in (2, 4):
        ws.cell(r, 6).number_format = "[h]:mm"      # elapsed hours
        ws.cell(r, 7).number_format = "hh:mm"       # custom time of day
        ws.cell(r, 8).number_format = "yyyy-mm-dd hh:mm"
    wb.save(out("xlsx-unsaved.xlsx"))


def make_bad():
    src = open(out("xlsx-types.xlsx"), "rb").read()
    with open(os.path.join(BAD, "xlsx-truncated.xlsx"), "wb") as f:
        f.write(src[:len(src) * 3 // 5])
    with zipfile.ZipFile(os.path.join(BAD, "xlsx-not-a-workbook.xlsx"), "w",
                         zipfile.ZIP_DEFLATED) as z:
        z.writestr("readme.txt", "Quarterly figures, see values.txt\n")
        z.writestr("data/values.txt", "price,area\n1,2\n")
    shutil.copy(out("xlsx-types.xlsx"), os.path.join(BAD, "xlsx-sales.xlsx"))
    # Entity expansion: 10 levels of 10 references (about 10^10 bytes).
    ents = ['<!ENTITY lol0 "lol">']
    for i in range(1, 10):
        ents.append('<!ENTITY lol%d "%s">' % (i, ("&lol%d;" % (i - 1)) * 10))
    laughs = ('<?xml version="1.0"?>\n<!DOCTYPE worksheet [\n%s\n]>\n'
              '<worksheet %s><sheetData><row r="1"><c r="A1" t="inlineStr">'
              '<is><t>&lol9;</t></is></c></row></sheetData></worksheet>'
              % ("\n".join(ents), NS))
    package(os.path.join(BAD, "xlsx-billion-laughs.xlsx"),
            [("Sheet1", laughs)])
    # Declared bomb: the sheet part claims 3 GiB (over the 2 GiB part cap).
    path = os.path.join(BAD, "xlsx-bomb-declared.xlsx")
    package(path, [("Sheet1", SIMPLE_SHEET)])
    patch_size(path, "xl/worksheets/sheet1.xml", 3 << 30)
    # Undeclared bomb: 1.2 MB of rows (a few KB deflated) declared as 1000
    # bytes; minizip stops at 1000 and the checksum fails.
    rows = "".join('<row><c><v>1</v></c><c><v>2</v></c></row>'
                   for _ in range(30000))
    big = SIMPLE_SHEET.replace("</sheetData>", rows + "</sheetData>")
    path = os.path.join(BAD, "xlsx-bomb-undeclared.xlsx")
    package(path, [("Sheet1", big)])
    patch_size(path, "xl/worksheets/sheet1.xml", 1000)


if __name__ == "__main__":
    # Names given on the command line ("unsaved") make only those.
    makers = {"openpyxl": make_openpyxl, "bad": make_bad,
              "hand": make_by_hand, "libreoffice": make_libreoffice,
              "unsaved": make_unsaved}
    for name in sys.argv[1:] or list(makers):
        makers[name]()
