#!/usr/bin/env python3
"""Random reference cases for tests/exact.rs (property test against exact least squares).

A seeded generator draws designs of 1-3 factors (2-4 levels, every cell filled) and 1-3
covariates, each covariate placed at a random offset from 0 to 1e10 with a random spread;
models take powers of a covariate (up to the cube, lower powers present), products of two
covariates, factor-by-covariate and factor-by-factor terms, always with the terms they
contain. Responses come from a random model plus noise. Everything is invented; every
value is a double exactly (covariates: offset plus multiples of 1/8; responses: multiples
of 1/64), and exact_lm.py computes each result exactly.

Run from the repository root (scipy needed for the p-values):
    /tmp/ref/bin/python tests/reference/random_designs.py [CASES] [SEED]
It writes tests/reference/exact/random.json.
"""
from fractions import Fraction as Q
import json
import os
import random
import sys

import exact_lm as lm

HERE = os.path.dirname(os.path.abspath(__file__))
OFFSETS = [0, 10 ** 3, 10 ** 4, 10 ** 5, 10 ** 6, 10 ** 7, 10 ** 8, 10 ** 9, 10 ** 10]


def one(rng, k):
    nf = rng.randint(1, 3)
    nc = rng.randint(1, 3)
    fnames = ["f%d" % i for i in range(1, nf + 1)]
    cnames = ["x%d" % i for i in range(1, nc + 1)]
    levels = {f: ["L%d" % j for j in range(1, rng.randint(2, 4 if nf < 3 else 3) + 1)] for f in fnames}
    terms = [[(f, 1)] for f in fnames]
    for c in cnames:
        terms.append([(c, 1)])
    # Powers of some covariates.
    for c in cnames:
        deg = rng.choice([1, 1, 2, 3])
        for p in range(2, deg + 1):
            terms.append([(c, p)])
    if nc >= 2 and rng.random() < 0.5:
        terms.append([(cnames[0], 1), (cnames[1], 1)])
    if rng.random() < 0.6:
        terms.append([(fnames[0], 1), (rng.choice(cnames), 1)])
    if nf >= 2 and rng.random() < 0.4:
        terms.append([(fnames[0], 1), (fnames[1], 1)])
    # Rows: every cell of the factors at least twice, then enough for the coefficients.
    cells = [[]]
    for f in fnames:
        cells = [c + [l] for c in cells for l in levels[f]]
    p_guess = 1 + sum(len(levels[f]) for f in fnames) * 2 + len(terms) * 4
    n = max(2 * len(cells), p_guess + rng.randint(6, 20))
    rows = [cells[i % len(cells)] for i in range(n)]
    offset = {c: rng.choice(OFFSETS) for c in cnames}
    spread = {c: rng.choice([1, 4, 16, 64, 300]) for c in cnames}
    data_num = {c: [] for c in cnames}
    dev = {c: [] for c in cnames}
    for _ in range(n):
        for c in cnames:
            d = Q(rng.randint(-spread[c] * 8, spread[c] * 8), 8)
            dev[c].append(d)
            data_num[c].append(offset[c] + d)
    factors = {f: [r[j] for r in rows] for j, f in enumerate(fnames)}
    effects = {(f, l): rng.gauss(0, 2) for f in fnames for l in levels[f]}
    slope = {c: rng.gauss(0, 1) / spread[c] for c in cnames}
    curve = {c: rng.gauss(0, 1) / spread[c] ** 2 for c in cnames}
    y = []
    for i in range(n):
        v = 20.0
        for f in fnames:
            v += effects[(f, factors[f][i])]
        for c in cnames:
            d = float(dev[c][i])
            v += slope[c] * d + curve[c] * d * d
        v += rng.gauss(0, 1)
        y.append(Q(round(v * 64), 64))
    data = lm.Data(data_num, factors, levels)
    model = {"intercept": True, "terms": terms}
    at = {c: offset[c] + Q(rng.randint(-spread[c] * 4, spread[c] * 4), 8) for c in cnames}
    name = "random %d: %s" % (k, " + ".join(lm.term_text(t) for t in terms))
    return lm.case(name, data, model, y, means=(fnames[0], at),
                   extra={"offsets": {c: offset[c] for c in cnames}})


def main():
    count = int(sys.argv[1]) if len(sys.argv) > 1 else 40
    seed = int(sys.argv[2]) if len(sys.argv) > 2 else 20261204
    rng = random.Random(seed)
    cases = []
    k = 0
    while len(cases) < count:
        c = one(rng, k)
        k += 1
        exp = c["expected"]
        # Keep full-rank designs with every table (a random draw may alias a column).
        if any(s.startswith("table anova m type 3") for s in exp) and any(
                s.startswith("table means") for s in exp):
            cases.append(c)
    out = os.path.join(HERE, "exact", "random.json")
    with open(out, "w") as f:
        json.dump({"source": "exact rational least squares (tests/reference/exact_lm.py) on invented data",
                   "seed": seed, "cases": cases}, f, indent=1)
        f.write("\n")
    print("wrote %d cases to %s" % (len(cases), out))


if __name__ == "__main__":
    main()
