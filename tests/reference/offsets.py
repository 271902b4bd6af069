#!/usr/bin/env python3
"""Reference cases for tests/exact.rs: the same designs with their covariates moved to
offsets 0, 1e3, 1e4, ..., 1e10 (and a map coordinate near 5.2e6), every result computed
exactly by exact_lm.py.

The data are invented for this test (marked so in the JSON): covariate values are the
offset plus multiples of 1/8 or 1/4, responses multiples of 1/64, so that every value is a
double exactly and covey reads the very numbers the exact computation uses. The responses
do not change with the offset; the covariates move. Sums of squares of hierarchical terms
therefore stay the same while coefficients, Type II/III tests of lower powers and tests
"at x = 0" change with the offset, and all of them are checked.

Run from the repository root (scipy needed for the p-values):
    python3 -m venv /tmp/ref && /tmp/ref/bin/pip install scipy
    /tmp/ref/bin/python tests/reference/offsets.py
It writes tests/reference/exact/offsets.json.
"""
from fractions import Fraction as Q
import json
import os
import random

import exact_lm as lm

OFFSETS = [0] + [10 ** k for k in range(3, 11)]
HERE = os.path.dirname(os.path.abspath(__file__))


def dyadic(rng, lo, hi, den):
    return Q(rng.randint(int(lo * den), int(hi * den)), den)


def cubic(c):
    """Thirteen rows with x near c, spread about 16, a genuine cubic trend."""
    rng = random.Random(17)
    d = [Q(k * 4, 1) + Q(rng.randint(-3, 3), 8) for k in range(-6, 7)]
    x = [c + v for v in d]
    y = [Q(round(64 * (50 + 0.8 * float(v) - 0.02 * float(v) ** 2 + 0.0009 * float(v) ** 3
                     + rng.gauss(0, 0.3))), 64) for v in d]
    data = lm.Data({"x": x}, {}, {})
    model = {"intercept": True, "terms": [[("x", 1)], [("x", 2)], [("x", 3)]]}
    return lm.case("cubic, offset %g" % c, data, model, y, extra={"offset": c})


def map_trend(c):
    """A cubic trend along a map coordinate with a treatment factor of three levels."""
    rng = random.Random(23)
    trt, x, y = [], [], []
    for i in range(30):
        t = "abc"[i % 3]
        d = Q(rng.randint(-1200, 1200), 4)
        trt.append(t)
        x.append(c + d)
        fd = float(d) / 100
        y.append(Q(round(64 * (20 + {"a": 0, "b": 1.5, "c": -0.75}[t] + 0.9 * fd
                                 - 0.4 * fd ** 2 + 0.35 * fd ** 3 + rng.gauss(0, 0.25))), 64))
    data = lm.Data({"x": x}, {"trt": trt}, {"trt": ["a", "b", "c"]})
    model = {"intercept": True,
             "terms": [[("trt", 1)], [("x", 1)], [("x", 2)], [("x", 3)]]}
    return lm.case("map trend, offset %g" % c, data, model, y,
                   means=("trt", {"x": c + Q(37, 4)}), extra={"offset": c})


def slopes(c):
    """Separate quadratic trends in x in three groups (factor-by-covariate products)."""
    rng = random.Random(29)
    g, x, y = [], [], []
    for i in range(36):
        t = ["p", "q", "r"][i % 3]
        d = dyadic(rng, -12, 12, 8)
        g.append(t)
        x.append(c + d)
        slope = {"p": 0.5, "q": 0.9, "r": 0.2}[t]
        y.append(Q(round(64 * (10 + {"p": 0, "q": 2, "r": -1}[t] + slope * float(d)
                                 + 0.05 * float(d) ** 2 + rng.gauss(0, 0.5))), 64))
    data = lm.Data({"x": x}, {"g": g}, {"g": ["p", "q", "r"]})
    model = {"intercept": True,
             "terms": [[("g", 1)], [("x", 1)], [("x", 2)], [("g", 1), ("x", 1)]]}
    return lm.case("separate slopes, offset %g" % c, data, model, y,
                   means=("g", {"x": c + Q(5, 2)}), extra={"offset": c})


def product(c):
    """Two covariates near the offset, their product, and a factor by one of them."""
    rng = random.Random(31)
    g, x, z, y = [], [], [], []
    for i in range(40):
        t = ["u", "v"][i % 2]
        dx = dyadic(rng, -10, 10, 8)
        dz = dyadic(rng, -6, 6, 8)
        g.append(t)
        x.append(c + dx)
        z.append(c + dz)
        y.append(Q(round(64 * (5 + (1.0 if t == "v" else 0.0) + 0.3 * float(dx)
                                 - 0.2 * float(dz) + 0.04 * float(dx) * float(dz)
                                 + (0.1 * float(dx) if t == "v" else 0.0)
                                 + rng.gauss(0, 0.4))), 64))
    data = lm.Data({"x": x, "z": z}, {"g": g}, {"g": ["u", "v"]})
    model = {"intercept": True,
             "terms": [[("g", 1)], [("x", 1)], [("z", 1)], [("x", 1), ("z", 1)],
                       [("g", 1), ("x", 1)]]}
    return lm.case("product, offset %g" % c, data, model, y,
                   means=("g", {"x": c + Q(3, 2), "z": c - Q(1, 2)}), extra={"offset": c})


def main():
    cases = []
    for make in (cubic, map_trend, slopes, product):
        for c in OFFSETS:
            cases.append(make(c))
    cases.append(map_trend(5_200_000))
    out = os.path.join(HERE, "exact", "offsets.json")
    os.makedirs(os.path.dirname(out), exist_ok=True)
    with open(out, "w") as f:
        json.dump({"source": "exact rational least squares (tests/reference/exact_lm.py) on invented data",
                   "cases": cases}, f, indent=1)
        f.write("\n")
    print("wrote %d cases to %s" % (len(cases), out))


if __name__ == "__main__":
    main()
