"""Writes the invented data of the data-source benchmark (tests/bench/sources.sh): a
workbook of ROWS rows (.xlsx, written with the standard library: shared strings, as
spreadsheet programs write them) and a SQLite table of ROWS rows (Python's sqlite3).
Fixed seed; the values describe nothing real.

    python3 tests/bench/make_sources.py xlsx 100000 target/bench/rows_100000.xlsx
    python3 tests/bench/make_sources.py sqlite 1000000 target/bench/rows_1000000.sqlite
"""

import os
import random
import sqlite3
import sys
import zipfile

GROUPS = ["A", "B", "C", "D"]


def rows(n):
    rng = random.Random(19)
    for i in range(n):
        g = GROUPS[i % 4]
        x = round(rng.gauss(50, 10), 2)
        y = round(10 + 0.5 * x + GROUPS.index(g) + rng.gauss(0, 2), 3)
        yield (f"u{i + 1}", g, x, y)


def xlsx(n, path):
    strings = ["id", "group", "x", "y"] + GROUPS
    index = {s: k for k, s in enumerate(strings)}
    body = ['<row r="1">' + "".join(
        f'<c r="{c}1" t="s"><v>{k}</v></c>' for k, c in enumerate("ABCD")) + "</row>"]
    for r, (ident, g, x, y) in enumerate(rows(n), start=2):
        index[ident] = len(strings)
        strings.append(ident)
        body.append(
            f'<row r="{r}"><c r="A{r}" t="s"><v>{index[ident]}</v></c>'
            f'<c r="B{r}" t="s"><v>{index[g]}</v></c>'
            f'<c r="C{r}"><v>{x!r}</v></c><c r="D{r}"><v>{y!r}</v></c></row>'
        )
    ns = "http://schemas.openxmlformats.org"
    rel = f"{ns}/officeDocument/2006/relationships"
    main = "application/vnd.openxmlformats-officedocument.spreadsheetml"
    parts = {
        "[Content_Types].xml": f'<Types xmlns="{ns}/package/2006/content-types">'
        '<Default Extension="rels" ContentType="application/vnd.openxmlformats-package.relationships+xml"/>'
        '<Default Extension="xml" ContentType="application/xml"/>'
        f'<Override PartName="/xl/workbook.xml" ContentType="{main}.sheet.main+xml"/>'
        f'<Override PartName="/xl/worksheets/sheet1.xml" ContentType="{main}.worksheet+xml"/>'
        f'<Override PartName="/xl/sharedStrings.xml" ContentType="{main}.sharedStrings+xml"/></Types>',
        "_rels/.rels": f'<Relationships xmlns="{ns}/package/2006/relationships">'
        f'<Relationship Id="rId1" Type="{rel}/officeDocument" Target="xl/workbook.xml"/></Relationships>',
        "xl/workbook.xml": f'<workbook xmlns="{ns}/spreadsheetml/2006/main" xmlns:r="{rel}">'
        '<sheets><sheet name="data" sheetId="1" r:id="rId1"/></sheets></workbook>',
        "xl/_rels/workbook.xml.rels": f'<Relationships xmlns="{ns}/package/2006/relationships">'
        f'<Relationship Id="rId1" Type="{rel}/worksheet" Target="worksheets/sheet1.xml"/>'
        f'<Relationship Id="rId2" Type="{rel}/sharedStrings" Target="sharedStrings.xml"/></Relationships>',
        "xl/sharedStrings.xml": f'<sst xmlns="{ns}/spreadsheetml/2006/main" count="{len(strings)}" '
        f'uniqueCount="{len(strings)}">' + "".join(f"<si><t>{s}</t></si>" for s in strings) + "</sst>",
        "xl/worksheets/sheet1.xml": f'<worksheet xmlns="{ns}/spreadsheetml/2006/main"><sheetData>'
        + "".join(body) + "</sheetData></worksheet>",
    }
    with zipfile.ZipFile(path, "w", zipfile.ZIP_DEFLATED) as z:
        for name, text in parts.items():
            info = zipfile.ZipInfo(name, date_time=(2026, 1, 1, 0, 0, 0))
            info.compress_type = zipfile.ZIP_DEFLATED
            z.writestr(info, text.encode("utf-8"))


def sqlite(n, path):
    if os.path.exists(path):
        os.remove(path)
    con = sqlite3.connect(path)
    con.execute("CREATE TABLE data (id TEXT, \"group\" TEXT, x REAL, y REAL)")
    con.executemany("INSERT INTO data VALUES (?, ?, ?, ?)", rows(n))
    con.commit()
    con.close()


if __name__ == "__main__":
    kind, n, path = sys.argv[1], int(sys.argv[2]), sys.argv[3]
    {"xlsx": xlsx, "sqlite": sqlite}[kind](n, path)
