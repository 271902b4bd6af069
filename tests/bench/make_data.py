#!/usr/bin/env python3
"""Writes an invented benchmark data set for covey (standard library only, fixed seed).

Usage: make_data.py ROWS OUT.csv

Columns: y (response), x (covariate), g (a factor with levels A, B, C, D), note (a text
column covey does not use in the model). The numbers are invented: y = 10 + level effect
+ 0.8 x + noise. Values are written with at most 7 significant digits so that no column
asks for exact decimal residuals.
"""
import random
import sys

SEED = 20261201
EFFECTS = {"A": 0.0, "B": 1.5, "C": -0.75, "D": 2.25}
LEVELS = sorted(EFFECTS)


def main() -> None:
    rows = int(sys.argv[1])
    out = sys.argv[2]
    rng = random.Random(SEED)
    with open(out, "w", encoding="ascii", newline="\n") as f:
        f.write("y,x,g,note\n")
        for i in range(rows):
            g = LEVELS[i % 4]
            x = rng.uniform(20.0, 80.0)
            y = 10.0 + EFFECTS[g] + 0.8 * x + rng.gauss(0.0, 2.0)
            f.write(f"{y:.3f},{x:.3f},{g},r{i % 97}\n")


if __name__ == "__main__":
    main()
