#!/usr/bin/env python3
"""Independent reference values for tests/checks.rs (the `check M` statement).

The data in tests/fixtures/data/pens.csv are INVENTED: a fixed pseudo-random draw from the
generator below, rounded, with one response value blanked and one value pushed out on purpose
so that the influence table has something to list. No animal was weighed.

Everything is recomputed here with numpy and scipy only, sharing no code with covey:
  - residuals of the model from numpy.linalg.lstsq (treatment coding, CONVENTIONS.md);
  - scipy.stats.shapiro on those residuals;
  - scipy.stats.levene(center='median') on the residuals grouped by each factor's levels;
  - equal slopes: extra-sum-of-squares F from two lstsq fits (with and without the
    factor-by-covariate columns), p from scipy.stats.f.sf;
  - covariate balance: scipy.stats.f_oneway of the covariate on each factor;
  - leverage: diagonal of the hat matrix X (X'X)^-1 X'; Cook's distance and the externally
    studentized residual by their definitions, refitting with each row left out.

Run:
  python3 tests/reference/check_reference.py --write-data   (rewrites the invented CSV)
  python3 tests/reference/check_reference.py                 (prints the Rust constants that
                                                              tests/checks.rs holds verbatim)
Needs numpy and scipy.
"""
import csv
import os
import sys

import numpy as np
from scipy import stats

HERE = os.path.dirname(os.path.abspath(__file__))
DATA = os.path.join(HERE, "..", "fixtures", "data", "pens.csv")
DIETS = ["control", "low", "high"]
BARNS = ["east", "west"]

# Thresholds of common practice that covey's influence table uses.
LEVERAGE_FACTOR = 2.0
COOK_NUMERATOR = 4.0
STUDENTIZED_LIMIT = 3.0


def write_data():
    """Invented pens: 12 per diet, two barns; pens on the high diet start heavier."""
    rng = np.random.default_rng(20261201)
    effect = {"control": 0.0, "low": 2.5, "high": 4.0}
    rows = []
    pen = 0
    for d in DIETS:
        for k in range(12):
            pen += 1
            barn = BARNS[0] if (k * 7 + len(d)) % 3 else BARNS[1]
            start = rng.normal(20.0, 2.2) + (2.0 if d == "high" else 0.0)
            final = (30.0 + effect[d] + (0.8 if barn == "west" else 0.0)
                     + 1.1 * (start - 20.0) + rng.normal(0.0, 1.4))
            rows.append([pen, d, barn, f"{start:.1f}", f"{final:.1f}"])
    rows[7][4] = "NA"                                  # a pen whose final weight was lost
    rows[20][4] = f"{float(rows[20][4]) + 6.5:.1f}"    # an unusually heavy pen
    rows[30][3] = "28.9"                               # an unusually heavy start
    rows[30][4] = f"{float(rows[30][4]) + 4.0:.1f}"
    with open(DATA, "w", newline="") as f:
        w = csv.writer(f, lineterminator="\n")
        w.writerow(["pen", "diet", "barn", "start_kg", "final_kg"])
        w.writerows(rows)


def read_data():
    """Rows with a response; each with its line in the file (the header is line 1)."""
    out = []
    with open(DATA, newline="") as f:
        r = csv.reader(f)
        next(r)
        for line, row in enumerate(r, start=2):
            if row[4] == "NA":
                continue
            out.append((line, row[1], row[2], float(row[3]), float(row[4])))
    return out


def ind(values, level):
    return np.array([1.0 if v == level else 0.0 for v in values])


def rss(x, y):
    b, *_ = np.linalg.lstsq(x, y, rcond=None)
    e = y - x @ b
    return float(e @ e), e, b


def fmt(v):
    return repr(float(v))


def out(name, values):
    print(f"const {name}: [f64; {len(values)}] = [{', '.join(fmt(v) for v in values)}];")


def main():
    rows = read_data()
    lines = [r[0] for r in rows]
    diet = [r[1] for r in rows]
    barn = [r[2] for r in rows]
    start = np.array([r[3] for r in rows])
    y = np.array([r[4] for r in rows])
    n = len(rows)
    one = np.ones(n)
    # Model `main`: final_kg on diet + barn + start_kg (treatment coding).
    x = np.column_stack([one, ind(diet, "low"), ind(diet, "high"), ind(barn, "west"), start])
    p = x.shape[1]
    rss_full, e, _ = rss(x, y)
    df = n - p
    s2 = rss_full / df

    sw = stats.shapiro(e)
    print(f"// model main: n = {n}, p = {p}")
    print("// scipy.stats.shapiro on the lstsq residuals: W, p")
    out("SHAPIRO", [sw.statistic, sw.pvalue])

    for name, fac, levels in [("DIET", diet, DIETS), ("BARN", barn, BARNS)]:
        groups = [e[np.array([v == lv for v in fac])] for lv in levels]
        lv = stats.levene(*groups, center="median")
        print(f"// scipy.stats.levene(center='median'), residuals by {name.lower()}: F, df1, df2, p")
        out(f"SPREAD_{name}", [lv.statistic, len(levels) - 1, n - len(levels), lv.pvalue])

    for name, fac, levels in [("DIET", diet, DIETS), ("BARN", barn, BARNS)]:
        extra = np.column_stack([ind(fac, lv) * start for lv in levels[1:]])
        rss_big, _, _ = rss(np.column_stack([x, extra]), y)
        df1 = extra.shape[1]
        df2 = n - p - df1
        f = ((rss_full - rss_big) / df1) / (rss_big / df2)
        print(f"// lstsq with and without {name.lower()}-by-start_kg columns: F, df1, df2, scipy.stats.f.sf")
        out(f"SLOPES_{name}", [f, df1, df2, stats.f.sf(f, df1, df2)])

    for name, fac, levels in [("DIET", diet, DIETS), ("BARN", barn, BARNS)]:
        groups = [start[np.array([v == lv for v in fac])] for lv in levels]
        ow = stats.f_oneway(*groups)
        print(f"// scipy.stats.f_oneway of start_kg on {name.lower()}: F, df1, df2, p")
        out(f"BALANCE_{name}", [ow.statistic, len(levels) - 1, n - len(levels), ow.pvalue])

    # Influence. Leverage from the hat matrix; Cook's distance and the externally studentized
    # residual by definition, refitting without each row.
    h = np.diag(x @ np.linalg.inv(x.T @ x) @ x.T)
    _, _, b_full = rss(x, y)
    cook = np.empty(n)
    stud = np.empty(n)
    for i in range(n):
        keep = np.arange(n) != i
        rss_i, _, b_i = rss(x[keep], y[keep])
        d = x @ b_full - x @ b_i
        cook[i] = float(d @ d) / (p * s2)
        s_i = np.sqrt(rss_i / (n - 1 - p))
        stud[i] = e[i] / (s_i * np.sqrt(1.0 - h[i]))
    print("// data-file line of each fitted row")
    print(f"const LINES: [usize; {n}] = [{', '.join(str(v) for v in lines)}];")
    print("// diagonal of X (X'X)^-1 X' (numpy)")
    out("LEVERAGE", h)
    print("// sum of squared changes of fitted values without row i, / (p s^2) (numpy lstsq)")
    out("COOK", cook)
    print("// e_i / (s_(i) sqrt(1 - h_i)), s_(i) from the fit without row i (numpy lstsq)")
    out("STUDENTIZED", stud)
    flagged = [lines[i] for i in range(n)
               if h[i] > LEVERAGE_FACTOR * p / n or cook[i] > COOK_NUMERATOR / n
               or abs(stud[i]) > STUDENTIZED_LIMIT]
    print("// lines over a threshold: leverage > 2p/n, Cook > 4/n, |studentized| > 3")
    print(f"const FLAGGED: [usize; {len(flagged)}] = [{', '.join(str(v) for v in flagged)}];")


if __name__ == "__main__":
    if "--write-data" in sys.argv:
        write_data()
    else:
        main()
