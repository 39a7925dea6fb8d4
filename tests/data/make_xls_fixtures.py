#!/usr/bin/python3
"""Makes the .xls fixtures of tests/test_xls.c, their CSV twins, the .xls
bad files of tests/bad/ and the seed corpus of tests/fuzz/corpus-xls/.

Each workbook is written as .xlsx by python3-openpyxl, then saved as .xls
by LibreOffice headless (soffice --headless --convert-to xls, Debian
package libreoffice-calc-nogui). The CSV twin of each sheet is written here
from the same values, with formula results worked out here, so the test
can compare every cell the .xls reader gives with what the CSV reader gives.

Run from the top folder:  /usr/bin/python3 tests/data/make_xls_fixtures.py
All data are invented.
"""
import csv
import datetime
import os
import shutil
import struct
import subprocess
import sys
import tempfile

import olefile
import openpyxl
from openpyxl.utils.datetime import CALENDAR_MAC_1904

TOP = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
DATA = os.path.join(TOP, "tests", "data")
BAD = os.path.join(TOP, "tests", "bad")
CORPUS = os.path.join(TOP, "tests", "fuzz", "corpus-xls")

D = datetime.date
DT = datetime.datetime
T = datetime.time


def iso(v):
    """A value as the CSV twin writes it."""
    if v is None:
        return ""
    if isinstance(v, bool):
        return "TRUE" if v else "FALSE"
    if isinstance(v, DT):
        return v.strftime("%Y-%m-%d %H:%M:%S")
    if isinstance(v, D):
        return v.strftime("%Y-%m-%d")
    if isinstance(v, T):  # a time alone reads as the fraction of a day
        return repr((v.hour * 3600 + v.minute * 60 + v.second) / 86400)
    return str(v)


def write_csv(path, rows):
    with open(path, "w", newline="", encoding="utf-8") as f:
        w = csv.writer(f, lineterminator="\n")
        for r in rows:
            w.writerow([iso(v) for v in r])


def put(ws, row, col, value, fmt=None, error=False):
    c = ws.cell(row=row, column=col, value=value)
    if fmt:
        c.number_format = fmt
    if error:
        c.data_type = "e"
    return c


def types_book(tmp):
    """One sheet with every kind of cell; twin rows hold the expected values."""
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Types"
    head = ["price", "street", "sold on", "sold at", "viewing", "pool",
            "survey", "double price", "label", "is dear", "per room", "next day"]
    for c, h in enumerate(head, 1):
        put(ws, 1, c, h)
    data = [
        # price, street, sold on, sold at, viewing, pool, survey
        (2.385, "Elm Row 4", D(2024, 1, 1), DT(2024, 1, 1, 12, 30), T(6, 0), True, "#N/A"),
        (318500, "Łąka 3", D(1999, 12, 31), DT(2003, 7, 15, 8, 5, 9), T(23, 59, 59), False, None),
        (-12.75, None, D(1900, 3, 1), DT(2026, 3, 15, 0, 0, 1), None, None, "#DIV/0!"),
        (None, "Quay Side", None, None, T(12, 0), True, "ok"),
        (1e-7, "", D(2079, 6, 6), DT(1950, 2, 28, 23, 0), T(0, 0, 1), False, None),
    ]
    twin = [head]
    for i, (price, street, on, at, view, pool, survey) in enumerate(data):
        r = i + 2
        put(ws, r, 1, price)
        put(ws, r, 2, street)
        put(ws, r, 3, on, "YYYY-MM-DD")
        put(ws, r, 4, at, "YYYY-MM-DD HH:MM:SS")
        put(ws, r, 5, view, "HH:MM:SS")
        put(ws, r, 6, pool)
        put(ws, r, 7, survey, error=survey is not None and survey.startswith("#"))
        # formulas: a number, a text, a yes-no, a number or error, a date
        put(ws, r, 8, "=A%d*2" % r)
        put(ws, r, 9, '="lot "&ROW()')
        put(ws, r, 10, "=A%d>1000" % r)
        put(ws, r, 11, "=A%d/F%d" % (r, r))
        put(ws, r, 12, "=C%d+1" % r if on else None, "YYYY-MM-DD")
        p = price or 0
        per = "#DIV/0!" if not pool else p / 1
        nxt = on + datetime.timedelta(days=1) if on else None
        twin.append([price, street or None, on, at, view, pool, survey,
                     p * 2, "lot %d" % r, p > 1000, per, nxt])
    src = os.path.join(tmp, "xls-types.xlsx")
    wb.save(src)
    return src, {"xls-types-Types.csv": twin}


def sheets_book(tmp):
    """Several sheets, non-ASCII names, a header below a title, sparse cells."""
    wb = openpyxl.Workbook()
    a = wb.active
    a.title = "Sales 2024"
    twin_a = [["parcel", "area", "price"],
              ["P-101", 412.5, 198000], ["P-102", 388.25, 176500],
              ["P-103", 501, 231250]]
    for row in twin_a:
        a.append(row)
    b = wb.create_sheet("Größe ÄÖÜ")
    put(b, 1, 2, "Millbrook County parcel sizes (invented)")
    heads = ["Fläche m²", "Zimmer", "Straße", "Notiz"]
    for c, h in enumerate(heads, 2):  # header in row 3, from column B
        put(b, 3, c, h)
    rows_b = [[120.5, 4, "Mühlweg 7", None],
              [None, 3, "Kai 2", "Eckhaus – ruhig"],
              [None, None, None, None],  # a blank row inside the data
              [87.125, None, "Ölberg 11", None]]
    for i, r in enumerate(rows_b):
        for c, v in enumerate(r, 2):
            if v is not None:
                put(b, 4 + i, c, v)
    twin_b = [heads] + [r for r in rows_b if any(v is not None for v in r)]
    c = wb.create_sheet("Notes")
    c["A1"] = "note"
    c["A2"] = "third sheet"
    src = os.path.join(tmp, "xls-sheets.xlsx")
    wb.save(src)
    return src, {"xls-sheets-Sales 2024.csv": twin_a,
                 "xls-sheets-Größe ÄÖÜ.csv": twin_b,
                 "xls-sheets-Notes.csv": [["note"], ["third sheet"]]}


def mac_book(tmp):
    """The 1904 date system: LibreOffice keeps it when saving .xls."""
    wb = openpyxl.Workbook()
    wb.epoch = CALENDAR_MAC_1904
    ws = wb.active
    ws.title = "Mac"
    for c, h in enumerate(["listed", "signed", "plus week", "value"], 1):
        put(ws, 1, c, h)
    data = [(D(2024, 1, 1), DT(2024, 1, 1, 12, 0), 1.5),
            (D(1904, 1, 2), DT(1987, 10, 19, 9, 30, 15), 250000.5),
            (D(2031, 8, 30), DT(2000, 2, 29, 18, 45), -3)]
    twin = [["listed", "signed", "plus week", "value"]]
    for i, (d, dt, v) in enumerate(data):
        r = i + 2
        put(ws, r, 1, d, "YYYY-MM-DD")
        put(ws, r, 2, dt, "YYYY-MM-DD HH:MM:SS")
        put(ws, r, 3, "=A%d+7" % r, "YYYY-MM-DD")
        put(ws, r, 4, v)
        twin.append([d, dt, d + datetime.timedelta(days=7), v])
    src = os.path.join(tmp, "xls-1904.xlsx")
    wb.save(src)
    return src, {"xls-1904-Mac.csv": twin}


def serials_book(tmp):
    """Date-formatted numbers whose serials FreeXL's date text gets wrong
    (seen with 1.0.6: 0 and 2958465 and 45292.9999999)."""
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Serials"
    put(ws, 1, 1, "serial")
    put(ws, 1, 2, "as date")
    put(ws, 1, 3, "as datetime")
    twin = [["serial", "as date", "as datetime"]]
    for i, s in enumerate([1, 59, 60, 61, 45292, 45292.9999999, 2958465]):
        put(ws, i + 2, 1, s)
        put(ws, i + 2, 2, s, "YYYY-MM-DD")
        put(ws, i + 2, 3, s, "YYYY-MM-DD HH:MM:SS")
        twin.append([s, s, s])
    src = os.path.join(tmp, "xls-serials.xlsx")
    wb.save(src)
    return src, {"xls-serials-Serials.csv": twin}


ODD = 1.2345678901234  # a value LibreOffice writes as a NUMBER record


def boolerr_book(tmp):
    """Placeholders for BOOLERR cells, which LibreOffice does not write (it
    saves TRUE and #N/A as formulas); with_boolerr() puts them in."""
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Flags"
    ws.append(["id", "sold", "checked"])
    ws.append([1, ODD, ODD])
    ws.append([2, ODD, ODD])
    ws.append([3, ODD, ODD])
    src = os.path.join(tmp, "xls-boolerr.xlsx")
    wb.save(src)
    twin = [["id", "sold", "checked"], [1, True, "#N/A"], [2, False, True],
            [3, True, "#DIV/0!"]]
    return src, {"xls-boolerr-Flags.csv": twin}


def with_boolerr(xls):
    """Replaces each NUMBER record holding ODD, byte for byte, by a BOOLERR
    record ([MS-XLS] 2.4.24) and a 2-byte filler record, in the order of the
    twin above: a yes-no or an error (BErr 0x2A #N/A, 0x07 #DIV/0!)."""
    want = [(1, 0), (0x2A, 1), (0, 0), (1, 0), (1, 0), (0x07, 1)]
    ole = olefile.OleFileIO(xls, write_mode=True)
    wb = bytearray(ole.openstream("Workbook").read())
    at, k = 0, 0
    odd = struct.pack("<d", ODD)
    while at + 4 <= len(wb):
        t, n = struct.unpack_from("<HH", wb, at)
        if t == 0x0203 and n == 14 and wb[at + 10:at + 18] == odd:
            row, col, xf = struct.unpack_from("<HHH", wb, at + 4)
            v, e = want[k]
            k += 1
            rec = struct.pack("<HHHHHBB", 0x0205, 8, row, col, xf, v, e)
            rec += struct.pack("<HH", 0x00E1, 2) + b"\0\0"  # INTERFACEHDR filler
            wb[at:at + 18] = rec
        at += 4 + n
    assert k == len(want), "found %d NUMBER records to replace" % k
    ole.write_stream("Workbook", bytes(wb))
    ole.close()


UNREADABLE = ("#FORMULA: this formula's saved result cannot be read from an "
              ".xls file; save the file as .xlsx")


def unreadable_book(tmp):
    """Text formulas whose results with_lost_strings() removes."""
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Lost"
    ws.append(["label", "rooms"])
    ws.append(['="lot "&ROW()', 4])
    ws.append(['="lot "&ROW()', 5])
    src = os.path.join(tmp, "xls-unreadable.xlsx")
    wb.save(src)
    return src, {"xls-unreadable-Lost.csv": [["label", "rooms"],
                                             [UNREADABLE, 4], [UNREADABLE, 5]]}


def with_lost_strings(xls):
    """Retypes every STRING record (a text formula's result, [MS-XLS]
    2.4.268) as INTERFACEHDR, which no cell reader uses: the formulas are
    left without a readable result, as in a file damaged in that one way."""
    ole = olefile.OleFileIO(xls, write_mode=True)
    wb = bytearray(ole.openstream("Workbook").read())
    at, k = 0, 0
    while at + 4 <= len(wb):
        t, n = struct.unpack_from("<HH", wb, at)
        if t == 0x0207:
            struct.pack_into("<H", wb, at, 0x00E1)
            k += 1
        at += 4 + n
    assert k == 2, "found %d STRING records" % k
    ole.write_stream("Workbook", bytes(wb))
    ole.close()


def soffice_xls(src, outdir):
    subprocess.run(["soffice", "--headless", "--convert-to", "xls",
                    "--outdir", outdir, src], check=True,
                   stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                   timeout=300)
    out = os.path.join(outdir, os.path.basename(src)[:-5] + ".xls")
    if not os.path.exists(out):
        sys.exit("soffice did not write " + out)
    return out


def cfbf(streams):
    """A minimal compound file ([MS-CFB], version 3, 512-byte sectors)
    holding the given (name, bytes) streams, each padded to the 4096-byte
    mini-stream cutoff so that every stream uses regular sectors."""
    SS, END, FREE, FATSECT, NOSTREAM = 512, 0xFFFFFFFE, 0xFFFFFFFF, 0xFFFFFFFD, 0xFFFFFFFF
    datas = [d + b"\0" * max(0, 4096 - len(d)) for _, d in streams]
    datas = [d + b"\0" * (-len(d) % SS) for d in datas]
    fat = [FATSECT, END]  # sector 0: the FAT, sector 1: the directory
    starts = []
    for d in datas:
        n = len(d) // SS
        first = len(fat)
        starts.append(first)
        fat += [first + k + 1 for k in range(n - 1)] + [END]
    assert len(fat) <= SS // 4
    fat += [FREE] * (SS // 4 - len(fat))

    def entry(name, typ, start, size, child=NOSTREAM, right=NOSTREAM):
        u = name.encode("utf-16-le") + b"\0\0"
        e = u + b"\0" * (64 - len(u))
        e += struct.pack("<HBBIII", len(u), typ, 1, NOSTREAM, right, child)
        e += b"\0" * 16 + b"\0" * 4 + b"\0" * 16
        e += struct.pack("<IQ", start, size)
        assert len(e) == 128
        return e

    ents = [entry("Root Entry", 5, END, 0, child=1)]
    for i, ((name, d), st) in enumerate(zip(streams, starts)):
        right = i + 2 if i + 1 < len(streams) else NOSTREAM
        ents.append(entry(name, 2, st, len(datas[i]), right=right))
    assert len(ents) <= 4
    while len(ents) < 4:
        ents.append(b"\0" * 64 + struct.pack("<HBB", 0, 0, 0) + b"\xff" * 12
                    + b"\0" * 48 + b"\0" * 4 + b"\0" * 8)
    hdr = b"\xD0\xCF\x11\xE0\xA1\xB1\x1A\xE1" + b"\0" * 16
    hdr += struct.pack("<HHHHH", 0x3E, 3, 0xFFFE, 9, 6) + b"\0" * 6
    hdr += struct.pack("<IIIIIIIII", 0, 1, 1, 0, 4096, END, 0, END, 0)
    hdr += struct.pack("<I", 0) + struct.pack("<I", FREE) * 108
    assert len(hdr) == 512
    return hdr + struct.pack("<%dI" % (SS // 4), *fat) + b"".join(ents) + b"".join(datas)


def with_filepass(xls, out):
    """A LibreOffice .xls whose first records after BOF are replaced, byte
    for byte, by a FILEPASS record (RC4 encryption header, [MS-XLS] 2.4.117)
    and a filler: the file says it is password-protected. Synthetic: the
    rest of the stream is not really encrypted, which a reader never gets
    to see."""
    shutil.copy(xls, out)
    ole = olefile.OleFileIO(out, write_mode=True)
    wb = bytearray(ole.openstream("Workbook").read())
    bof = 4 + struct.unpack_from("<H", wb, 2)[0]
    at, span = bof, 0
    while span < 80:  # gather records until there is room for both
        span += 4 + struct.unpack_from("<H", wb, at + span + 2)[0]
    body = struct.pack("<HHH", 1, 1, 1) + bytes(range(48))
    fp = struct.pack("<HH", 0x002F, len(body)) + body
    filler = struct.pack("<HH", 0x005C, span - len(fp) - 4) + b" " * (span - len(fp) - 4)
    wb[at:at + span] = fp + filler
    ole.write_stream("Workbook", bytes(wb))
    ole.close()


def job(path, comment, expect, data, options=""):
    """A bad-input job: what is wrong, the fragments the message must hold,
    and the file as the place (a file-level error has no line to name)."""
    with open(path, "w", encoding="utf-8") as f:
        f.write("# wrong: %s\n" % comment)
        for e in expect:
            f.write("# expect: %s\n" % e)
        f.write("# place: %s\n" % data)
        f.write("data %s%s\n" % (data, options))
        f.write("target price\ninputs area\nmodel linear\n")


def main():
    os.makedirs(DATA, exist_ok=True)
    os.makedirs(BAD, exist_ok=True)
    os.makedirs(CORPUS, exist_ok=True)
    with tempfile.TemporaryDirectory() as tmp:
        made = {}
        for fn in (types_book, sheets_book, mac_book, serials_book, boolerr_book,
                   unreadable_book):
            src, twins = fn(tmp)
            xls = soffice_xls(src, tmp)
            if fn is boolerr_book:
                with_boolerr(xls)
            if fn is unreadable_book:
                with_lost_strings(xls)
            dst = os.path.join(DATA, os.path.basename(xls))
            shutil.copy(xls, dst)
            made[os.path.basename(xls)] = dst
            for name, rows in twins.items():
                write_csv(os.path.join(DATA, name), rows)

        types = made["xls-types.xls"]
        with open(types, "rb") as f:
            whole = f.read()
        # bad files
        with open(os.path.join(BAD, "xls-truncated.xls"), "wb") as f:
            f.write(whole[:len(whole) // 2])
        job(os.path.join(BAD, "xls-truncated.job"),
            "the .xls file is cut off halfway", ["damaged", "xls-truncated.xls"],
            "xls-truncated.xls")
        with open(os.path.join(BAD, "xls-not-workbook.xls"), "wb") as f:
            f.write(cfbf([("Contents", b"invented notes, not a workbook\n" * 8)]))
        job(os.path.join(BAD, "xls-not-workbook.job"),
            "a compound file with no workbook stream inside",
            ["not an .xls workbook", "xls-not-workbook.xls"],
            "xls-not-workbook.xls")
        with_filepass(types, os.path.join(BAD, "xls-password.xls"))
        job(os.path.join(BAD, "xls-password.job"),
            "the .xls file is password-protected (FILEPASS record)",
            ["password-protected", "xls-password.xls"], "xls-password.xls")
        with open(os.path.join(BAD, "xls-encrypted-ooxml.xlsx"), "wb") as f:
            f.write(cfbf([("EncryptionInfo", b"\x04\x00\x04\x00\x40\x00\x00\x00"),
                          ("EncryptedPackage", b"\x10\x00\x00\x00\x00\x00\x00\x00")]))
        job(os.path.join(BAD, "xls-encrypted-ooxml.job"),
            "an encrypted (password-protected) .xlsx: a compound file with "
            "EncryptionInfo and EncryptedPackage streams",
            ["password", "xls-encrypted-ooxml.xlsx"], "xls-encrypted-ooxml.xlsx")
        shutil.copy(made["xls-sheets.xls"], os.path.join(BAD, "xls-no-such-sheet.xls"))
        job(os.path.join(BAD, "xls-no-such-sheet.job"),
            "the sheet named in the job is not in the workbook",
            ["Größe ÄÖÜ", "Sales 2024"], "xls-no-such-sheet.xls",
            ' sheet "Sales 2023"')

        # seed corpus: the fixtures and the bad files, each small
        for p in list(made.values()) + [os.path.join(BAD, n) for n in (
                "xls-truncated.xls", "xls-not-workbook.xls", "xls-password.xls",
                "xls-encrypted-ooxml.xlsx")]:
            shutil.copy(p, os.path.join(CORPUS, os.path.basename(p)))


if __name__ == "__main__":
    main()
