"""Writes the invented data sets of the worked documents.

Every number here is invented for teaching: no animal, plot or machine was
measured. The generator is seeded, so rerunning it gives the same files:

    python3 worked/data/make_data.py

It needs only Python's standard library.
"""

import csv
import os
import random

HERE = os.path.dirname(os.path.abspath(__file__))


def write(name, header, rows):
    with open(os.path.join(HERE, name), "w", newline="") as f:
        w = csv.writer(f, lineterminator="\n")
        w.writerow(header)
        w.writerows(rows)


def rations():
    """Three rations fed to weaned piglets for six weeks; final weight
    adjusted for the weight at the start. Parallel slopes by construction."""
    rng = random.Random(20261201)
    effect = {"barley": 0.0, "maize": 1.8, "maize+soy": 3.4}
    rows = []
    pen = 0
    for ration, shift in effect.items():
        for _ in range(10):
            pen += 1
            start = round(rng.gauss(11.5, 1.6), 1)
            final = 29.0 + 1.55 * (start - 11.5) + shift + rng.gauss(0, 1.3)
            rows.append([f"P{pen:02d}", ration, start, round(final, 1)])
    # One pen lost its record of the final weighing.
    rows[13][3] = ""
    rng.shuffle(rows)
    write("rations.csv", ["pen", "ration", "start_kg", "final_kg"], rows)


if __name__ == "__main__":
    rations()
