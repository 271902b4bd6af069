#!/usr/bin/env python3
"""Textbook one-way ANCOVA worked examples: data and printed values FROM MEMORY,
each recomputed here with numpy and kept only where the computation agrees with
every remembered printed value at its printed precision (the script stops
otherwise).

How to rerun (from the repository root):
    python3 -m pip install numpy && python3 tests/reference/textbook/compute.py

Writes <short_name>.csv (columns y, x, group) and <short_name>.json with
"source", "printed" (digit strings as printed, written verbatim as JSON numbers)
and "computed" (numpy, full double precision).
Model: y = intercept + group effect + common slope * x (groups 1, 2, 3; x raw).
"""
import json
import os

import numpy as np

HERE = os.path.dirname(os.path.abspath(__file__))

EXAMPLES = {
    "fiber_strength": {
        "source": ("D. C. Montgomery, Design and Analysis of Experiments, analysis of covariance "
                   "section: breaking strength of monofilament fiber (y, pounds) made on three "
                   "machines, fiber diameter (x, 10^-3 in) as covariate (Example 15.5 / Table 15.10 "
                   "in recent editions, numbering from memory); data and printed values from memory"),
        "y": [36, 41, 39, 42, 49, 40, 48, 39, 45, 44, 35, 37, 42, 34, 32],
        "x": [20, 25, 24, 25, 32, 22, 28, 22, 30, 28, 21, 23, 26, 21, 15],
        "printed": [
            ("total_syy", "346.40"), ("total_sxx", "261.73"), ("total_sxy", "282.60"),
            ("treatment_tyy", "140.40"), ("treatment_txx", "66.13"), ("treatment_txy", "96.00"),
            ("error_eyy", "206.00"), ("error_exx", "195.60"), ("error_exy", "186.60"),
            ("slope", "0.954"), ("error_ss", "27.99"), ("error_df", "11"), ("error_ms", "2.54"),
            ("reduced_error_ss", "41.27"), ("treatment_ss_adjusted", "13.28"),
            ("treatment_df", "2"), ("treatment_ms_adjusted", "6.64"), ("treatment_f", "2.61"),
            ("x_mean", "24.13"),
            ("adjusted_mean_1", "40.38"), ("adjusted_mean_2", "41.42"), ("adjusted_mean_3", "38.80"),
        ],
    },
    "cracker_promotion": {
        "source": ("M. H. Kutner, C. J. Nachtsheim, J. Neter, W. Li, Applied Linear Statistical "
                   "Models, analysis of covariance chapter: cracker sales (y, cases) under three "
                   "promotion types, sales in the preceding period (x) as covariate (cracker "
                   "promotion example, Table 22.1 in the 5th edition, numbering from memory); "
                   "data and printed values from memory"),
        "y": [38, 39, 36, 45, 33, 43, 38, 38, 27, 34, 24, 32, 31, 21, 28],
        "x": [21, 26, 22, 28, 19, 34, 26, 29, 18, 25, 23, 29, 30, 16, 29],
        "printed": [
            ("error_ss", "38.571"), ("error_df", "11"), ("error_ms", "3.506"),
            ("reduced_error_ss", "455.722"), ("treatment_f", "59.48"), ("slope", ".8986"),
            ("x_mean", "25"),
            # effect coding at the covariate mean: mean of the adjusted means, and the
            # effects of promotions 1 and 2
            ("overall_adjusted_mean", "33.80"), ("effect_1", "6.017"), ("effect_2", ".942"),
            ("adjusted_mean_1", "39.82"), ("adjusted_mean_2", "34.74"), ("adjusted_mean_3", "26.84"),
        ],
    },
}


def compute(y, x, g):
    y = np.asarray(y, float)
    x = np.asarray(x, float)
    g = np.asarray(g)
    levels = [1, 2, 3]
    n = len(y)

    def sc(u, v):
        return float(((u - u.mean()) * (v - v.mean())).sum())

    e = {k: 0.0 for k in ("yy", "xx", "xy")}
    for lv in levels:
        m = g == lv
        e["yy"] += sc(y[m], y[m])
        e["xx"] += sc(x[m], x[m])
        e["xy"] += sc(x[m], y[m])
    X = np.column_stack([np.ones(n)] + [(g == lv).astype(float) for lv in levels[1:]] + [x])
    q, r = np.linalg.qr(X)
    b = np.linalg.solve(r, q.T @ y)
    sse = float(((y - X @ b) ** 2).sum())
    Xr = np.column_stack([np.ones(n), x])
    qr_, rr = np.linalg.qr(Xr)
    br = np.linalg.solve(rr, qr_.T @ y)
    sser = float(((y - Xr @ br) ** 2).sum())
    dfe = n - len(levels) - 1
    mse = sse / dfe
    tr = sser - sse
    slope = float(b[-1])
    adj = [float(b[0] + (b[i] if i > 0 else 0.0) + slope * x.mean()) for i in range(len(levels))]
    overall = sum(adj) / len(adj)
    out = {
        "total_syy": sc(y, y), "total_sxx": sc(x, x), "total_sxy": sc(x, y),
        "error_eyy": e["yy"], "error_exx": e["xx"], "error_exy": e["xy"],
        "treatment_tyy": sc(y, y) - e["yy"], "treatment_txx": sc(x, x) - e["xx"],
        "treatment_txy": sc(x, y) - e["xy"],
        "slope": slope, "error_ss": sse, "error_df": dfe, "error_ms": mse,
        "reduced_error_ss": sser, "treatment_ss_adjusted": tr, "treatment_df": len(levels) - 1,
        "treatment_ms_adjusted": tr / (len(levels) - 1),
        "treatment_f": (tr / (len(levels) - 1)) / mse, "x_mean": float(x.mean()),
        "overall_adjusted_mean": overall, "effect_1": adj[0] - overall, "effect_2": adj[1] - overall,
    }
    for i, a in enumerate(adj):
        out["adjusted_mean_%d" % (i + 1)] = a
    return out


def agrees(printed, value):
    """True when value rounds to the printed digits (half a unit in the last printed place)."""
    decimals = len(printed.split(".")[1]) if "." in printed else 0
    return abs(value - float(printed)) <= 0.5 * 10 ** (-decimals) * (1 + 1e-9)


def main():
    for name, ex in EXAMPLES.items():
        g = [1] * 5 + [2] * 5 + [3] * 5
        comp = compute(ex["y"], ex["x"], g)
        bad = [(k, p, comp[k]) for k, p in ex["printed"] if not agrees(p, comp[k])]
        if bad:
            raise SystemExit("%s disagrees with the printed values: %r" % (name, bad))
        with open(os.path.join(HERE, name + ".csv"), "w") as f:
            f.write("y,x,group\n")
            for yy, xx, gg in zip(ex["y"], ex["x"], g):
                f.write("%d,%d,%d\n" % (yy, xx, gg))
        printed = ",\n".join("    %s: %s" % (json.dumps(k), ("0" + p if p.startswith(".") else p))
                             for k, p in ex["printed"])
        computed = ",\n".join("    %s: %s" % (json.dumps(k), json.dumps(comp[k]))
                              for k, _ in ex["printed"])
        text = ('{\n  "source": %s,\n  "printed": {\n%s\n  },\n  "computed": {\n%s\n  }\n}\n'
                % (json.dumps(ex["source"]), printed, computed))
        json.loads(text)
        with open(os.path.join(HERE, name + ".json"), "w") as f:
            f.write(text)
        print("%s: %d printed values, all agree" % (name, len(ex["printed"])))


if __name__ == "__main__":
    main()
