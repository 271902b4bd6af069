"""Writes the invented data of the data-source benchmark (tests/bench/sources.sh): a
workbook of ROWS rows (.xlsx, written by the worked data's writer, worked/data/make_data.py,
with the standard library: shared strings, as spreadsheet programs write them) and a SQLite table of ROWS rows (Python's sqlite3).
Fixed seed; the values describe nothing real.

    python3 tests/bench/make_sources.py xlsx 100000 target/bench/rows_100000.xlsx
    python3 tests/bench/make_sources.py sqlite 1000000 target/bench/rows_1000000.sqlite
"""

import os
import random
import sqlite3
import sys

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "..", "worked", "data"))
from make_data import write_xlsx  # noqa: E402

GROUPS = ["A", "B", "C", "D"]


def rows(n):
    rng = random.Random(19)
    for i in range(n):
        g = GROUPS[i % 4]
        x = round(rng.gauss(50, 10), 2)
        y = round(10 + 0.5 * x + GROUPS.index(g) + rng.gauss(0, 2), 3)
        yield (f"u{i + 1}", g, x, y)


def xlsx(n, path):
    header = ["id", "group", "x", "y"]
    write_xlsx(path, [("data", [header] + [list(r) for r in rows(n)])])


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
