#!/usr/bin/env python3
"""Exact reference for robust (HC3) standard errors at rows whose leverage is within about
1e-10 of 1: tests/comparisons.rs reads what this script writes.

How to rerun (from the repository root; needs only Python's standard library):
    python3 tests/reference/hc3_leverage.py

The data are INVENTED (typed in for this check; nothing was measured). Two data sets:

  * hc3-leverage.csv: y on g + x, one row of g1 at x = 175000 while every other x lies
    between 0.2 and 1.9, so that its leverage is 1 - 1.2e-10;
  * hc3-leverage-w.csv: y on g + x weights w, the rows of g3 but one of weight 4e-11,
    so that the one of weight 1 has a weighted leverage of 1 - 1.2e-10.

Everything is computed in exact rational arithmetic (fractions) on the exact binary values
of the data as covey reads them (each decimal rounded to the nearest double):
(X'WX)^-1 X'W^(1/2) diag(e_i^2 / (1 - h_i)^2) W^(1/2) X (X'WX)^-1 with e_i the weighted
residual sqrt(w_i) (y_i - x_i'b) and h_i the weighted leverage w_i x_i'(X'WX)^-1 x_i
(MacKinnon & White 1985). Coefficients are in reference coding: intercept, g = g2, g = g3, x.
"""
import csv
import json
import math
import os
from fractions import Fraction

HERE = os.path.dirname(os.path.abspath(__file__))
OUT = os.path.join(HERE, "comparisons")

G = ["g1"] * 5 + ["g2"] * 4 + ["g3"] * 4
X = ["0.3", "1.1", "0.7", "1.9", "175000", "0.5", "1.4", "0.2", "1.7", "0.9", "0.4", "1.6", "1.2"]
Y = ["3.1", "4.7", "3.6", "5.9", "262502.9", "4.4", "5.1", "3.9", "6.3", "5.2", "4.1", "6.6", "5.5"]

XW = ["0.3", "1.1", "0.7", "1.9", "1.3", "0.5", "1.4", "0.2", "1.7", "0.9", "0.4", "1.6", "1.2"]
YW = ["3.1", "4.7", "3.6", "5.9", "5.0", "4.4", "5.1", "3.9", "6.3", "5.2", "4.1", "6.6", "5.5"]
GW = ["g1"] * 5 + ["g2"] * 4 + ["g3"] * 4
# g3 has x at 0.9 (weight 1), 0.4 and 1.6 and 1.2 (weight 4e-11 each):
# the row at 0.9 all but determines g3's coefficient.
W = ["1", "1", "1", "1", "1", "1", "1", "1", "1", "1", "0.00000000004", "0.00000000004", "0.00000000004"]


def solve(a, b):
    """Solve A X = B exactly (Gauss-Jordan on fractions); B a list of columns."""
    n = len(a)
    m = [list(a[i]) + [b[j][i] for j in range(len(b))] for i in range(n)]
    for c in range(n):
        p = next(r for r in range(c, n) if m[r][c] != 0)
        m[c], m[p] = m[p], m[c]
        pv = m[c][c]
        m[c] = [v / pv for v in m[c]]
        for r in range(n):
            if r != c and m[r][c] != 0:
                f = m[r][c]
                m[r] = [u - f * v for u, v in zip(m[r], m[c])]
    return [[m[i][n + j] for i in range(n)] for j in range(len(b))]


def exact(g, x, y, w):
    """HC3 standard errors and the smallest 1 - h, exactly, on the doubles of the text."""
    d = lambda s: Fraction(float(s))
    rows = [[Fraction(1), Fraction(int(gi == "g2")), Fraction(int(gi == "g3")), d(xi)]
            for gi, xi in zip(g, x)]
    yf = [d(v) for v in y]
    wf = [d(v) for v in w]
    n, p = len(yf), 4
    xtx = [[sum(wf[i] * rows[i][a] * rows[i][b] for i in range(n)) for b in range(p)] for a in range(p)]
    xty = [sum(wf[i] * rows[i][a] * yf[i] for i in range(n)) for a in range(p)]
    cols = solve(xtx, [[Fraction(int(a == b)) for a in range(p)] for b in range(p)])
    inv = [[cols[j][i] for j in range(p)] for i in range(p)]
    b = [sum(inv[a][k] * xty[k] for k in range(p)) for a in range(p)]
    e = [yf[i] - sum(rows[i][a] * b[a] for a in range(p)) for i in range(n)]
    h = [wf[i] * sum(rows[i][a] * inv[a][k] * rows[i][k] for a in range(p) for k in range(p))
         for i in range(n)]
    # Weighted residual squared (w e^2) over (1 - h)^2, times the weighted row's outer product.
    omega = [wf[i] * e[i] * e[i] / (1 - h[i]) ** 2 for i in range(n)]
    meat = [[sum(omega[i] * wf[i] * rows[i][a] * rows[i][c] for i in range(n)) for c in range(p)]
            for a in range(p)]
    se = []
    for a in range(p):
        v = sum(inv[a][k] * meat[k][m] * inv[m][a] for k in range(p) for m in range(p))
        se.append(math.sqrt(v))
    return {"se": se, "one_minus_h": float(min(1 - v for v in h))}


def write(name, header, columns):
    with open(os.path.join(OUT, name), "w", newline="") as f:
        out = csv.writer(f, lineterminator="\n")
        out.writerow(header)
        for r in zip(*columns):
            out.writerow(r)


def main():
    os.makedirs(OUT, exist_ok=True)
    write("hc3-leverage.csv", ["g", "x", "y"], [G, X, Y])
    write("hc3-leverage-w.csv", ["g", "x", "y", "w"], [GW, XW, YW, W])
    ref = {
        "source": "tests/reference/hc3_leverage.py (exact rational arithmetic, Python fractions)",
        "unweighted": exact(G, X, Y, ["1"] * len(Y)),
        "weighted": exact(GW, XW, YW, W),
    }
    with open(os.path.join(OUT, "hc3-leverage.json"), "w") as f:
        json.dump(ref, f, indent=1, sort_keys=True)
        f.write("\n")


if __name__ == "__main__":
    main()
