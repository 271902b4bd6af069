#!/usr/bin/env python3
"""An independent check of the numbers covey prints for one invented ANCOVA data set with
unequal groups (tests/reference/outside/outside.csv, made by this script; invented, not measured),
against exact rational least squares (Python's fractions) and, for distribution functions and
the tests of assumptions, scipy.

Rerun (after `cargo build --release`):
    python3 -m pip install scipy numpy
    python3 tests/reference/outside_check.py

It renders tests/reference/outside/outside.md with `covey render --json`, recomputes every number of
every table from the data, and prints the worst log relative error (LRE: correct significant
digits) of each quantity. Every comparison, with its reference value and tolerance, goes to
tests/reference/outside/reference.json, which `tests/outside.rs` checks covey against (the Rust
test never runs Python).

Checked with scipy 1.17.1 and numpy (studentized_range, dunnett's multivariate t, shapiro,
levene(center='median'), f, t, ncf).
"""
import json
import math
import os
import random
import subprocess
import sys
from fractions import Fraction as Fr

import numpy as np
from scipy import optimize, stats

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from comparisons import product_form_cdf, product_form_quantile  # noqa: E402

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(os.path.dirname(HERE))
DOC = os.path.join(HERE, "outside", "outside.md")
DATA = os.path.join(HERE, "outside", "outside.csv")
OUT = os.path.join(HERE, "outside", "reference.json")


def make_data():
    """Four groups of 5, 8, 4 and 7 rows, a second factor h with an empty-free but unequal
    layout, a covariate x near 20, a response y, and case weights w."""
    random.seed(7)
    rows = ["g,h,x,y,w"]
    ns = {"a": 5, "b": 8, "c": 4, "d": 7}
    shift = {"a": 0, "b": 2, "c": -1, "d": 3}
    for g, n in ns.items():
        for i in range(n):
            h = "p" if i % 3 else "q"
            x = round(random.uniform(10, 30), 2)
            y = 5 + shift[g] + 0.7 * x + (0.1 * x if g == "b" else 0)
            y = round(y + random.gauss(0, 2 * (1 + (g == "d"))), 2)
            w = random.choice([1, 2, 3, 0.5])
            rows.append(f"{g},{h},{x},{y},{w}")
    return "\n".join(rows) + "\n"


# ---------------------------------------------------------------- exact linear algebra


def solve(a, b):
    """Exact solution of a x = b (a square, nonsingular) by Gauss-Jordan on Fractions; b may be
    a matrix (list of columns)."""
    n = len(a)
    cols = b if isinstance(b[0], list) else [b]
    m = [list(a[i]) + [c[i] for c in cols] for i in range(n)]
    for k in range(n):
        piv = next(i for i in range(k, n) if m[i][k] != 0)
        m[k], m[piv] = m[piv], m[k]
        inv = 1 / m[k][k]
        m[k] = [v * inv for v in m[k]]
        for i in range(n):
            if i != k and m[i][k] != 0:
                f = m[i][k]
                m[i] = [vi - f * vk for vi, vk in zip(m[i], m[k])]
    out = [[m[i][n + j] for i in range(n)] for j in range(len(cols))]
    return out if isinstance(b[0], list) else out[0]


def inverse(a):
    n = len(a)
    eye = [[Fr(int(i == j)) for i in range(n)] for j in range(n)]
    return [list(r) for r in zip(*solve(a, eye))]


def dot(u, v):
    return sum(x * y for x, y in zip(u, v))


def quad(l, v):
    return dot(l, [dot(r, l) for r in v])


class Fit:
    """Least squares of y on the columns of x with case weights w (exact)."""

    def __init__(self, x, y, w=None):
        # Columns that are all zero (the product of an empty cell) are aliased: left out, as
        # covey leaves them out; `keep` says which were kept.
        self.keep = [j for j in range(len(x[0])) if any(r[j] != 0 for r in x)]
        x = [[r[j] for j in self.keep] for r in x]
        n, p = len(y), len(x[0])
        w = w or [Fr(1)] * n
        self.x, self.y, self.w, self.n, self.p = x, y, w, n, p
        xtx = [[sum(w[i] * x[i][a] * x[i][b] for i in range(n)) for b in range(p)] for a in range(p)]
        xty = [sum(w[i] * x[i][a] * y[i] for i in range(n)) for a in range(p)]
        self.xtxi = inverse(xtx)
        self.b = [dot(r, xty) for r in self.xtxi]
        self.fitted = [dot(r, self.b) for r in x]
        self.e = [yi - fi for yi, fi in zip(y, self.fitted)]
        self.rss = sum(wi * e * e for wi, e in zip(w, self.e))
        self.df = n - p
        self.s2 = self.rss / self.df
        self.h = [w[i] * quad(x[i], self.xtxi) for i in range(n)]

    def var(self, l):
        return quad(self.cut(l), self.xtxi) * self.s2

    def cut(self, l):
        """A row of coefficients of the full design, on the columns kept."""
        return [l[j] for j in self.keep] if len(l) != self.p else l

    def at(self, l):
        return dot(self.cut(l), self.b)

    def hc3(self):
        """(X'X)^-1 X' diag(e_i^2 / (1 - h_i)^2) X (X'X)^-1, exact."""
        p = self.p
        meat = [[Fr(0)] * p for _ in range(p)]
        for i in range(self.n):
            c = self.e[i] ** 2 / (1 - self.h[i]) ** 2
            xi = self.x[i]
            for a in range(p):
                for b in range(p):
                    meat[a][b] += c * xi[a] * xi[b]
        left = [[dot(self.xtxi[a], [meat[k][b] for k in range(p)]) for b in range(p)] for a in range(p)]
        return [[dot(left[a], [self.xtxi[k][b] for k in range(p)]) for b in range(p)] for a in range(p)]


# ---------------------------------------------------------------- the data and designs

rows = []
LEVELS = {"g": ["a", "b", "c", "d"], "h": ["p", "q"]}


def load():
    with open(DATA) as f:
        head = f.readline().strip().split(",")
        for line in f:
            cells = dict(zip(head, line.strip().split(",")))
            for k in ("x", "y", "w"):
                cells[k] = Fr(cells[k])
            rows.append(cells)


def xbar():
    return sum(r["x"] for r in rows) / len(rows)


def column_parts(term, r, coding):
    """The values of a term's columns in row r: a term is a list of parts, each a factor name
    or a covariate name; factor parts expand by `coding` ('ref': dummies of levels 2..k; 'sum':
    level i minus the last level)."""
    vals = [Fr(1)]
    for part in term:
        if part in LEVELS:
            lv = LEVELS[part]
            if coding == "ref":
                d = [Fr(int(r[part] == l)) for l in lv[1:]]
            else:
                d = [Fr(int(r[part] == l)) - Fr(int(r[part] == lv[-1])) for l in lv[:-1]]
            vals = [v * u for v in vals for u in d]
        else:
            vals = [v * r[part] for v in vals]
    return vals


def design(terms, coding="ref", where=None):
    """Model matrix rows for `terms` (intercept first). `where` gives an evaluation point: a
    dict of part -> value (a level, or a number), with a factor given as a dict of level
    weights for averaging."""
    out = []
    for r in rows if where is None else [where]:
        row = [Fr(1)]
        for t in terms:
            row += column_parts(t, r, coding)
        out.append(row)
    return out


def point_row(terms, point):
    """The row of coefficients (reference coding) of the prediction at `point`, in which a
    factor maps to {level: weight} (an average over levels) and a covariate to a number."""
    row = [Fr(1)]
    for t in terms:
        vals = [Fr(1)]
        for part in t:
            if part in LEVELS:
                wts = point[part]
                d = [wts.get(l, Fr(0)) for l in LEVELS[part][1:]]
                vals = [v * u for v in vals for u in d]
            else:
                vals = [v * point[part] for v in vals]
        row += vals
    return row


def even(f):
    k = len(LEVELS[f])
    return {l: Fr(1, k) for l in LEVELS[f]}


# ---------------------------------------------------------------- comparison bookkeeping

worst = {}


def lre(c, r):
    if c is None or r is None:
        return None
    r = float(r)
    if r == 0:
        return 15.0 if abs(c) < 1e-15 else -math.log10(abs(c))
    d = abs(c - r)
    return 15.0 if d == 0 else min(15.0, -math.log10(d / abs(r)))


records = []

# Tolerances the Rust test applies, by the kind of reference: exact rational arithmetic and
# scipy's t and F tails agree with covey to about 1e-13, so 1e-10 relative leaves room for
# rounding only; scipy's studentized range is 1 - cdf with an absolute tolerance near 1e-11;
# scipy's Shapiro-Wilk uses single-precision coefficients in places (W agrees to 1e-10, p to
# 1e-8); Dunnett p: covey states 1e-5, the exact product-form integral is good to 1e-10 and
# scipy's randomised multivariate t to a few 1e-6, scipy's dunnett (its own randomised rule) to
# about 5e-5 here; Dunnett
# limits are judged against their half-width (covey's critical value carries the 1e-5 of its
# probability).
TOLERANCES = {
    "rel": 1e-10,
    "studentized range": 1e-9,
    "shapiro": 1e-7,
    "dunnett exact": 1e-5,
    "dunnett mvt": 2e-5,
    "dunnett scipy": 1e-4,
    "dunnett limit": 2e-4,
    "dunnett scipy limit": 2e-3,
}


def mode_of(quantity, absolute, scale):
    if "Shapiro" in quantity:
        return "shapiro"
    if "Dunnett" in quantity:
        if "scipy" in quantity:
            return "dunnett scipy limit" if "limit" in quantity else "dunnett scipy"
        if "limit" in quantity:
            return "dunnett limit"
        return "dunnett exact" if "exact" in quantity else "dunnett mvt"
    if "tukey" in quantity and quantity.startswith("p"):
        return "studentized range"
    return "rel"


def cmp(quantity, where, ref, absolute=False, scale=None):
    """Records the LRE of covey's value (`where`: a table row and a column key) against the
    reference (relative to `scale` when given: a confidence limit near 0 is judged against its
    half-width; absolute for probabilities from integration)."""
    row, key = where
    covey = row[key]
    if covey is None or ref is None:
        print(f"MISSING {quantity}: covey {covey} reference {ref}")
        worst[quantity] = min(worst.get(quantity, 99), -99)
        return
    mode = mode_of(quantity, absolute, scale)
    records.append({
        "quantity": quantity, "statement": row["__at"][0], "kind": row["__at"][1],
        "row": row["__at"][2], "column": key, "reference": float(ref),
        "scale": None if scale is None else float(abs(scale)),
        "absolute": bool(absolute), "tolerance": TOLERANCES[mode],
    })
    if scale is not None:
        d = abs(covey - float(ref)) / abs(scale)
        v = 15.0 if d == 0 else min(15.0, -math.log10(d))
    elif absolute:
        d = abs(covey - float(ref))
        v = 15.0 if d == 0 else min(15.0, -math.log10(d))
    else:
        v = lre(covey, ref)
    if v < worst.get(quantity, 99):
        worst[quantity] = v
    if v < -math.log10(TOLERANCES[mode]):
        print(f"BEYOND TOLERANCE {quantity}: covey {covey!r} reference {float(ref)!r} ({v:.1f})")


def undefined(quantity, where):
    """covey must show this value as undefined (null in JSON, — in Markdown)."""
    row, key = where
    records.append({
        "quantity": quantity + " shown as undefined", "statement": row["__at"][0],
        "kind": row["__at"][1], "row": row["__at"][2], "column": key, "reference": None,
        "scale": None, "absolute": False, "tolerance": 0.0,
    })
    worst[quantity + " shown as undefined"] = 15.0 if row[key] is None else -99


def fsqrt(x):
    return math.sqrt(float(x)) if x >= 0 else float("nan")


def sqrt_fr(x):
    """sqrt of a Fraction to double precision, correctly rounded via integer sqrt."""
    x = Fr(x)
    scale = 10 ** 40
    return math.isqrt(x.numerator * scale * scale // x.denominator) / scale


def tables(doc):
    out = {}
    for t in doc["outputs"]:
        for i, r in enumerate(t["rows"]):
            r["__at"] = (t["statement"], t["kind"], i)
        out.setdefault(t["statement"], []).append(t)
    return out


def by_statement(tbl, statement, kind=None):
    for t in tbl[statement]:
        if kind is None or t["kind"] == kind:
            return t
    raise KeyError(statement)


# ---------------------------------------------------------------- the checks

G = [("g",)]
PAR = [("g",), ("x",)]
SEP = [("g",), ("x",), ("g", "x")]
TWO = [("g",), ("h",), ("g", "h"), ("x",)]


def check_summary(tbl):
    t = by_statement(tbl, "table summary xc")
    m = xbar()
    xc = [r["x"] - m for r in rows]
    # covey's column is x - mean(x) in doubles; its mean is that of the rounded differences,
    # whose exact value is at most a few units of 1e-16: the displayed 0.000 is the check.
    cmp("summary: SD", (t["rows"][0], "sd"), sqrt_fr(sum(v * v for v in xc) / (len(xc) - 1)))
    t = by_statement(tbl, "table summary x by g")
    for row in t["rows"]:
        xs = [r["x"] for r in rows if r["g"] == row["level"]]
        mean = sum(xs) / len(xs)
        cmp("summary: mean", (row, "mean"), mean)
        sd = sqrt_fr(sum((v - mean) ** 2 for v in xs) / (len(xs) - 1))
        cmp("summary: SD", (row, "sd"), sd)
        cmp("summary: SE", (row, "se"), sd / math.sqrt(len(xs)))
        xs.sort()
        k = len(xs)
        med = xs[k // 2] if k % 2 else (xs[k // 2 - 1] + xs[k // 2]) / 2
        cmp("summary: median", (row, "median"), med)


def means_check(name, t, fit, terms, factor, at, tcrit_df=None):
    for row in t["rows"]:
        point = {"g": even("g"), "h": even("h"), "x": at}
        point[factor] = {row["level"]: Fr(1)}
        l = point_row(terms, point)
        est = fit.at(l)
        se = sqrt_fr(fit.var(l))
        q = stats.t.ppf(0.975, fit.df)
        cmp("adjusted mean", (row, "mean"), est)
        cmp("adjusted mean: SE", (row, "se"), se)
        cmp("adjusted mean: limits", (row, "lower"), float(est) - q * se)
        cmp("adjusted mean: limits", (row, "upper"), float(est) + q * se)


def diffs(fit, terms, factor, pairs, base):
    out = []
    for a, b in pairs:
        pa = dict(base, **{factor: {a: Fr(1)}})
        pb = dict(base, **{factor: {b: Fr(1)}})
        l = [u - v for u, v in zip(point_row(terms, pa), point_row(terms, pb))]
        out.append((fit.cut(l), fit.at(l), fit.var(l)))
    return out


def check_pairs(tbl, statement, fit, terms, method, base, within=None):
    t = by_statement(tbl, statement)
    lv = LEVELS["g"]
    k = len(lv)
    rows_ = [r for r in t["rows"] if within is None or r["within"] == within]
    pairs = [(r["first"], r["second"]) for r in rows_]
    m = len(pairs)
    got = diffs(fit, terms, "g", pairs, base)
    raw = []
    for row, (l, est, v) in zip(rows_, got):
        se = sqrt_fr(v)
        tv = float(est) / se
        cmp("difference", (row, "estimate"), est)
        cmp("difference: SE", (row, "se"), se)
        cmp("difference: t", (row, "t"), tv)
        raw.append(2 * stats.t.sf(abs(tv), fit.df))
    df = fit.df
    if method == "tukey":
        q = stats.studentized_range.ppf(0.95, k, df) / math.sqrt(2)
        ps = [stats.studentized_range.sf(abs(r["t"]) * math.sqrt(2), k, df) for r in rows_]
    elif method == "bonferroni":
        q = stats.t.ppf(1 - 0.05 / (2 * m), df)
        ps = [min(1.0, p * m) for p in raw]
    elif method == "sidak":
        q = stats.t.ppf(1 - (1 - 0.95 ** (1 / m)) / 2, df)
        ps = [-math.expm1(m * math.log1p(-p)) for p in raw]
    elif method == "holm":
        q = None
        order = sorted(range(m), key=lambda i: raw[i])
        ps = [0.0] * m
        run = 0.0
        for rank, i in enumerate(order):
            run = max(run, min(1.0, (m - rank) * raw[i]))
            ps[i] = run
    for row, p, (l, est, v) in zip(rows_, ps, got):
        # scipy's studentized_range.sf is 1 - cdf, good to an absolute 1e-11 or so.
        cmp(f"p ({method})", (row, "p"), p, absolute=method == "tukey")
        if q is not None:
            se = sqrt_fr(v)
            cmp(f"difference limits ({method})", (row, "lower"), float(est) - q * se, scale=q * se)
            cmp(f"difference limits ({method})", (row, "upper"), float(est) + q * se, scale=q * se)


def check_dunnett(tbl, statement, fit, terms, side):
    t = by_statement(tbl, statement)
    pairs = [(r["first"], r["second"]) for r in t["rows"]]
    got = diffs(fit, terms, "g", pairs, {"x": xbar(), "h": even("h")})
    ls = [l for l, _, _ in got]
    cov = np.array([[float(quad_pair(a, b, fit)) for b in ls] for a in ls])
    sd = np.sqrt(np.diag(cov))
    corr = cov / np.outer(sd, sd)
    k = len(ls)
    mvt = stats.multivariate_t(loc=np.zeros(k), shape=corr, df=fit.df, seed=12345)
    for row in t["rows"]:
        tv = row["t"]
        if side == "two":
            p = 1 - mvt.cdf(np.full(k, abs(tv)), lower_limit=np.full(k, -abs(tv)), maxpts=5_000_000)
        elif side == "above":
            p = 1 - mvt.cdf(np.full(k, tv), maxpts=5_000_000)
        else:
            p = 1 - mvt.cdf(np.full(k, np.inf), lower_limit=np.full(k, tv), maxpts=5_000_000)
        cmp(f"p (Dunnett, {side})", (row, "p"), p, absolute=True)


def quad_pair(a, b, fit):
    return dot(a, [dot(r, b) for r in fit.xtxi]) * fit.s2


def check_anova(tbl, statement, terms, kind):
    t = by_statement(tbl, statement)
    y = [r["y"] for r in rows]
    if kind != 3 and len(Fit(design(terms), y).keep) < len(design(terms)[0]):
        # with an aliased column a term's df is that of its kept columns
        pass
    full = Fit(design(terms, "sum" if kind == 3 else "ref"), y)
    for row in t["rows"]:
        if row["term"] in ("residual", "total", "corrected total"):
            continue
        name = row["term"]
        idx = next(i for i, tt in enumerate(terms) if " by ".join(tt) == name)
        term = terms[idx]
        if kind == 1:
            small = terms[:idx]
            big = terms[: idx + 1]
        elif kind == 2:
            small = [u for u in terms if not set(term) <= set(u)]
            big = small + [term]
        else:
            small = [u for u in terms if u != term]
            big = terms
        coding = "sum" if kind == 3 else "ref"
        rs = Fit(design(small, coding), y).rss
        rb = Fit(design(big, coding), y).rss
        ss = rs - rb
        q = len(Fit(design(big, coding), y).keep) - len(Fit(design(small, coding), y).keep)
        f = ss / q / full.s2
        cmp(f"SS (Type {kind})", (row, "ss"), ss)
        cmp(f"F (Type {kind})", (row, "f"), f)
        cmp(f"p from F (Type {kind})", (row, "p"), stats.f.sf(float(f), q, full.df))
        cmp("partial eta squared", (row, "partial_eta_sq"), ss / (ss + full.rss))


def check_slopes(tbl):
    y = [r["y"] for r in rows]
    sep = Fit(design(SEP), y)
    par = Fit(design(PAR), y)
    t = by_statement(tbl, "table slopes sep of x for g", "slopes")
    for row in t["rows"]:
        # slope in level L: coefficient of x plus that of L by x
        l = [Fr(0)] * len(sep.b)
        l[4] = Fr(1)
        if row["level"] != "a":
            l[5 + LEVELS["g"].index(row["level"]) - 1] = Fr(1)
        est = dot(l, sep.b)
        se = sqrt_fr(sep.var(l))
        cmp("slope", (row, "slope"), est)
        cmp("slope: SE", (row, "se"), se)
        cmp("slope: p", (row, "p"), 2 * stats.t.sf(abs(float(est) / se), sep.df))
    t = by_statement(tbl, "table slopes sep of x for g", "slopes-equality")
    f = (par.rss - sep.rss) / 3 / sep.s2
    cmp("equal-slopes F", (t["rows"][0], "f"), f)
    cmp("equal-slopes p", (t["rows"][0], "p"), stats.f.sf(float(f), 3, sep.df))


def check_cells(tbl):
    y = [r["y"] for r in rows]
    fit = Fit(design(TWO), y)
    t = by_statement(tbl, "table means two for g by h")
    for row in t["rows"]:
        l = point_row(TWO, {"g": {row["level"]: Fr(1)}, "h": {row["by"]: Fr(1)}, "x": xbar()})
        est = fit.at(l)
        cmp("cell mean", (row, "mean"), est)
        cmp("cell mean: SE", (row, "se"), sqrt_fr(fit.var(l)))
        cmp("cell rows", (row, "rows"), sum(1 for r in rows if r["g"] == row["level"] and r["h"] == row["by"]))
    for h in LEVELS["h"]:
        check_pairs(tbl, "table differences two for g within h", fit, TWO, "tukey", {"h": {h: Fr(1)}, "x": xbar()}, within=h)


def check_robust(tbl):
    y = [r["y"] for r in rows]
    fit = Fit(design(PAR), y)
    v = fit.hc3()
    t = by_statement(tbl, "table coefficients par robust")
    for i, row in enumerate(t["rows"]):
        cmp("HC3 coefficient SE", (row, "se"), sqrt_fr(v[i][i]))
    t = by_statement(tbl, "table anova par robust")
    for row in t["rows"]:
        if row["term"] == "g":
            idx = [1, 2, 3]
        elif row["term"] == "x":
            idx = [4]
        else:
            continue
        vb = [[v[a][b] for b in idx] for a in idx]
        bb = [fit.b[a] for a in idx]
        wald = dot(bb, solve(vb, bb)) / len(idx)
        cmp("robust Wald F", (row, "f"), wald)
        cmp("robust Wald p", (row, "p"), stats.f.sf(float(wald), len(idx), fit.df))


def check_weighted(tbl):
    y = [r["y"] for r in rows]
    w = [r["w"] for r in rows]
    fit = Fit(design(PAR), y, w)
    t = by_statement(tbl, "table coefficients wpar")
    for i, row in enumerate(t["rows"]):
        cmp("weighted coefficient", (row, "estimate"), fit.b[i])
        cmp("weighted coefficient: SE", (row, "se"), sqrt_fr(fit.var([Fr(int(j == i)) for j in range(fit.p)])))
    means_check("wpar", by_statement(tbl, "table means wpar for g"), fit, PAR, "g", xbar())


def check_log(tbl):
    y = np.array([math.log(float(r["y"])) for r in rows])
    x = np.array([[float(v) for v in r] for r in design(PAR)])
    # float reference: numpy lstsq in double (the log is not rational)
    b, *_ = np.linalg.lstsq(x, y, rcond=None)
    t = by_statement(tbl, "table means lg for g")
    for row in t["rows"]:
        l = np.array([float(v) for v in point_row(PAR, {"g": {row["level"]: Fr(1)}, "x": xbar()})])
        cmp("adjusted mean (log response)", (row, "mean"), l @ b)


def check_fit(tbl):
    y = [r["y"] for r in rows]
    fit = Fit(design(PAR), y)
    t = by_statement(tbl, "table fit par")["rows"][0]
    ybar = sum(y) / len(y)
    tss = sum((v - ybar) ** 2 for v in y)
    n, p = fit.n, fit.p
    r2 = 1 - fit.rss / tss
    cmp("R squared", (t, "r_squared"), r2)
    cmp("adjusted R squared", (t, "adj_r_squared"), 1 - (1 - r2) * (n - 1) / (n - p))
    f = (tss - fit.rss) / (p - 1) / fit.s2
    cmp("overall F", (t, "f"), f)
    cmp("overall p", (t, "p"), stats.f.sf(float(f), p - 1, fit.df))
    cmp("residual SD", (t, "sigma"), sqrt_fr(fit.s2))
    ll = -n / 2 * (math.log(2 * math.pi) + math.log(float(fit.rss / n)) + 1)
    cmp("AIC", (t, "aic"), -2 * ll + 2 * (p + 1))
    cmp("BIC", (t, "bic"), -2 * ll + math.log(n) * (p + 1))


def check_diagnostics(tbl, name="par", weighted=False):
    y = [r["y"] for r in rows]
    w = [r["w"] for r in rows] if weighted else None
    fit = Fit(design(PAR), y, w)
    checks = by_statement(tbl, f"check {name}", "check")
    # the weighted residuals sqrt(w) e
    e = [math.sqrt(float(wi)) * float(v) for wi, v in zip(fit.w, fit.e)]
    sw = stats.shapiro(e)
    got = {r["check"]: r for r in checks["rows"]}
    for what, r in got.items():
        if what.startswith("normality"):
            cmp("Shapiro-Wilk W", (r, "statistic"), sw.statistic)
            cmp("Shapiro-Wilk p", (r, "p"), sw.pvalue)
        elif "spread" in what:
            groups = [[e[i] for i, rr in enumerate(rows) if rr["g"] == l] for l in LEVELS["g"]]
            bf = stats.levene(*groups, center="median")
            cmp("Brown-Forsythe F", (r, "statistic"), bf.statistic)
            cmp("Brown-Forsythe p", (r, "p"), bf.pvalue)
        elif "balance" in what:
            groups = [[float(rr["x"]) for rr in rows if rr["g"] == l] for l in LEVELS["g"]]
            ow = stats.f_oneway(*groups)
            cmp("balance F", (r, "statistic"), ow.statistic)
            cmp("balance p", (r, "p"), ow.pvalue)
        elif "slopes" in what:
            sep = Fit(design(SEP), y, w)
            f = (fit.rss - sep.rss) / 3 / sep.s2
            cmp("equal-slopes F", (r, "statistic"), f)
    infl = by_statement(tbl, f"check {name}", "influence")
    for r in infl["rows"]:
        i = int(r["row"]) - 2
        h = fit.h[i]
        e2 = fit.w[i] * fit.e[i] ** 2
        cmp("leverage", (r, "leverage"), h)
        cmp("Cook's distance", (r, "cooks_distance"), e2 * h / (fit.p * fit.s2 * (1 - h) ** 2))
        s2i = (fit.rss - e2 / (1 - h)) / (fit.df - 1)
        sign = 1 if fit.e[i] > 0 else -1
        cmp("studentized residual", (r, "studentized_residual"), sign * sqrt_fr(e2 / (s2i * (1 - h))))


def check_more(tbl):
    """Contrast, the comparison of nested models, HC3 adjusted means, and the separate-slopes
    model on the centred covariate, whose adjusted means at its mean are those of `sep` at the
    mean of x."""
    y = [r["y"] for r in rows]
    par = Fit(design(PAR), y)
    sep = Fit(design(SEP), y)
    row = by_statement(tbl, "table contrast par for g weights 1, -0.5, -0.5, 0")["rows"][0]
    w = {"a": Fr(1), "b": Fr(-1, 2), "c": Fr(-1, 2), "d": Fr(0)}
    l = [Fr(0)] * par.p
    for lv, wt in w.items():
        l = [u + wt * v for u, v in zip(l, point_row(PAR, {"g": {lv: Fr(1)}, "x": xbar()}))]
    est = par.at(l)
    se = sqrt_fr(par.var(l))
    cmp("contrast", (row, "estimate"), est)
    cmp("contrast: SE", (row, "se"), se)
    cmp("contrast: p", (row, "p"), 2 * stats.t.sf(abs(float(est) / se), par.df))
    row = by_statement(tbl, "table compare par, sep")["rows"][0]
    f = (par.rss - sep.rss) / 3 / sep.s2
    cmp("compare: extra SS", (row, "extra_ss"), par.rss - sep.rss)
    cmp("compare: RSS", (row, "rss_smaller"), par.rss)
    cmp("compare: F", (row, "f"), f)
    cmp("compare: p", (row, "p"), stats.f.sf(float(f), 3, sep.df))
    v = par.hc3()
    for row in by_statement(tbl, "table means par for g robust")["rows"]:
        l = point_row(PAR, {"g": {row["level"]: Fr(1)}, "x": xbar()})
        cmp("HC3 adjusted mean SE", (row, "se"), sqrt_fr(quad(l, v)))
    for row in by_statement(tbl, "table means sepc for g")["rows"]:
        l = point_row(SEP, {"g": {row["level"]: Fr(1)}, "x": xbar()})
        cmp("adjusted mean (centred covariate)", (row, "mean"), sep.at(l))
        cmp("adjusted mean: SE (centred covariate)", (row, "se"), sqrt_fr(sep.var(l)))


def plan_power(k, n_total, f, r2, c, alpha=0.05):
    df2 = n_total - k - c
    crit = stats.f.isf(alpha, k - 1, df2)
    return stats.ncf.sf(crit, k - 1, df2, n_total * f * f / (1 - r2))


def check_plan(tbl):
    t = by_statement(tbl, "plan p1 for 4 groups with 1 covariate explaining 0.4 effect f 0.25 n 20")
    row = t["rows"][0]
    n, k, c = 80, 4, 1
    lam = n * 0.25 ** 2 / (1 - 0.4)
    crit = stats.f.isf(0.05, k - 1, n - k - c)
    cmp("plan power", (row, "power"), stats.ncf.sf(crit, k - 1, n - k - c, lam))
    row = by_statement(tbl, "plan p2 for 4 groups with 1 covariate explaining 0.4 effect f 0.25 power 0.9")["rows"][0]
    n = next(n for n in range(2, 1000) if plan_power(4, 4 * n, 0.25, 0.4, 1) >= 0.9)
    cmp("plan: n per group", (row, "n_per_group"), n)
    cmp("plan power", (row, "power"), plan_power(4, 4 * n, 0.25, 0.4, 1))
    row = by_statement(tbl, "plan p3 for 4 groups effect detectable sd 2 n 20 power 0.8")["rows"][0]
    f = optimize.brentq(lambda f: plan_power(4, 80, f, 0.0, 0) - 0.8, 0.01, 2, xtol=1e-15, rtol=1e-15)
    cmp("plan: detectable f", (row, "effect_f"), f)
    row = by_statement(tbl, "plan p4 for 3 groups in ratio 2:1:1 effect means 10, 11, 12 sd 2 n 10")["rows"][0]
    share = [Fr(1, 2), Fr(1, 4), Fr(1, 4)]
    means = [10, 11, 12]
    grand = sum(s * m for s, m in zip(share, means))
    f2 = sum(s * (m - grand) ** 2 for s, m in zip(share, means)) / 4
    cmp("plan: f from means (unequal groups)", (row, "effect_f"), sqrt_fr(f2))
    cmp("plan power", (row, "power"), plan_power(3, 40, math.sqrt(float(f2)), 0.0, 0))


def check_extra(tbl):
    """Dunnett within the levels of another factor, the weighted model's anova and checks, and
    robust Wald F of Types II and III in models with interactions."""
    y = [r["y"] for r in rows]
    two = Fit(design(TWO), y)
    t = by_statement(tbl, "table differences two for g within h versus a")
    for h in LEVELS["h"]:
        rs = [r for r in t["rows"] if r["within"] == h]
        got = diffs(two, TWO, "g", [(r["first"], r["second"]) for r in rs], {"h": {h: Fr(1)}, "x": xbar()})
        ls = [l for l, _, _ in got]
        cov = np.array([[float(quad_pair(a, b, two)) for b in ls] for a in ls])
        sd = np.sqrt(np.diag(cov))
        mvt = stats.multivariate_t(loc=np.zeros(len(ls)), shape=cov / np.outer(sd, sd), df=two.df, seed=12345)
        for r, (l, est, v) in zip(rs, got):
            cmp("difference (within, versus)", (r, "estimate"), est)
            tv = abs(r["t"])
            p = 1 - mvt.cdf(np.full(len(ls), tv), lower_limit=np.full(len(ls), -tv), maxpts=5_000_000)
            cmp("p (Dunnett within levels, mvt)", (r, "p"), p, absolute=True)
    w = [r["w"] for r in rows]
    for kind_terms in (PAR,):
        full = Fit(design(kind_terms), y, w)
        t = by_statement(tbl, "table anova wpar")
        for r in t["rows"]:
            if r["term"] not in ("g", "x"):
                continue
            small = [u for u in kind_terms if u != (r["term"],)]
            ss = Fit(design(small), y, w).rss - full.rss
            q = 3 if r["term"] == "g" else 1
            cmp("weighted SS (Type 2)", (r, "ss"), ss)
            cmp("weighted F (Type 2)", (r, "f"), ss / q / full.s2)
    check_diagnostics(tbl, "wpar", weighted=True)
    for statement, terms, coding, test in (
        ("table anova sep type 3 robust", SEP, "sum", lambda term, u: u == term),
        ("table anova two type 2 robust", TWO, "ref", None),
    ):
        t = by_statement(tbl, statement)
        for r in t["rows"]:
            names = [" by ".join(u) for u in terms]
            if r["term"] not in names:
                continue
            term = terms[names.index(r["term"])]
            fit = Fit(design(terms, coding), y)
            v = fit.hc3()
            width = [len(design([u], coding)[0]) - 1 for u in terms]
            start = 1 + sum(width[: terms.index(term)])
            idx = list(range(start, start + width[terms.index(term)]))
            if test is None:
                # Type II hypothesis in the full model: L = X_T' (I - P0) X, P0 the projection
                # on the terms that do not contain the term (the term's own columns left out).
                keep = [0] + [c for u, wd, st in zip(terms, width, [1 + sum(width[:k]) for k in range(len(terms))])
                              if u != term and not set(term) < set(u) for c in range(st, st + wd)]
                x = design(terms, coding)
                x0 = [[r[c] for c in keep] for r in x]
                f0 = Fit(x0, [Fr(0)] * len(x))
                resid = []
                for j in range(fit.p):
                    col = [r[j] for r in x]
                    b0 = [dot(rw, [sum(x0[i][a] * col[i] for i in range(len(x))) for a in range(len(keep))]) for rw in f0.xtxi]
                    resid.append([col[i] - dot(x0[i], b0) for i in range(len(x))])
                L = [[sum(x[i][t] * resid[j][i] for i in range(len(x))) for j in range(fit.p)] for t in idx]
            else:
                L = [[Fr(int(j == t)) for j in range(fit.p)] for t in idx]
            lb = [dot(l, fit.b) for l in L]
            lvl = [[dot(a, [dot(rw, b) for rw in v]) for b in L] for a in L]
            wald = dot(lb, solve(lvl, lb)) / len(idx)
            cmp("robust Wald F (interaction models)", (r, "f"), wald)


def check_oneway_dunnett(tbl):
    """scipy.stats.dunnett on the raw groups (one-way data, product correlations)."""
    samples = {l: [float(r["y"]) for r in rows if r["g"] == l] for l in LEVELS["g"]}
    others = [l for l in LEVELS["g"] if l != "a"]
    for alt, st in (("two-sided", "table differences ow for g versus a"), ("greater", "table differences ow for g versus a above")):
        res = stats.dunnett(*[samples[l] for l in others], control=samples["a"], alternative=alt, random_state=np.random.default_rng(1))
        ci = res.confidence_interval(0.95)
        t = by_statement(tbl, st)
        n0 = len(samples["a"])
        lam = [math.sqrt(len(samples[l]) / (len(samples[l]) + n0)) for l in others]
        df = sum(len(v) for v in samples.values()) - len(samples)
        two = alt == "two-sided"
        crit = product_form_quantile(0.95, lam, df, two)
        for row in t["rows"]:
            i = others.index(row["first"])
            exact = 1 - product_form_cdf(abs(row["t"]) if two else row["t"], lam, df, two)
            cmp(f"p (Dunnett one-way vs exact product-form integral, {alt})", (row, "p"), exact, absolute=True)
            se = row["se"]
            cmp(f"Dunnett limit vs exact critical value ({alt})", (row, "lower"), row["estimate"] - crit * se, scale=crit * se)
            cmp(f"p (Dunnett one-way vs scipy.stats.dunnett, {alt})", (row, "p"), res.pvalue[i], absolute=True)
            half = float(ci.high[i] - ci.low[i]) / 2 if alt == "two-sided" else 1.0
            cmp(f"Dunnett limit vs scipy.stats.dunnett ({alt})", (row, "lower"), ci.low[i], scale=half)


def check_holes(tbl):
    global rows
    kept = [r for r in rows if not (r["g"] == "c" and r["h"] == "q")]
    saved, rows = rows, kept
    y = [r["y"] for r in rows]
    fit = Fit(design(TWO), y)
    for kind in (1, 2):
        check_anova(tbl, f"table anova holes type {kind}", TWO, kind)
    t = by_statement(tbl, "table means holes for g by h")
    for row in t["rows"]:
        if row["level"] == "c" and row["by"] == "q":
            undefined("empty cell", (row, "mean"))
            continue
        l = point_row(TWO, {"g": {row["level"]: Fr(1)}, "h": {row["by"]: Fr(1)}, "x": xbar()})
        cmp("cell mean (empty cell design)", (row, "mean"), fit.at(l))
        cmp("cell mean: SE (empty cell design)", (row, "se"), sqrt_fr(fit.var(l)))
    t = by_statement(tbl, "table means holes for g")
    for row in t["rows"]:
        if row["level"] == "c":
            undefined("non-estimable mean", (row, "mean"))
            continue
        l = point_row(TWO, {"g": {row["level"]: Fr(1)}, "h": even("h"), "x": xbar()})
        cmp("adjusted mean (empty cell design)", (row, "mean"), fit.at(l))
        cmp("adjusted mean: SE (empty cell design)", (row, "se"), sqrt_fr(fit.var(l)))
    t = by_statement(tbl, "table differences holes for g")
    est = [r for r in t["rows"] if "c" not in (r["first"], r["second"])]
    got = diffs(fit, TWO, "g", [(r["first"], r["second"]) for r in est], {"h": even("h"), "x": xbar()})
    for row, (l, e, v) in zip(est, got):
        cmp("difference (empty cell design)", (row, "estimate"), e)
        cmp("difference: SE (empty cell design)", (row, "se"), sqrt_fr(v))
        # Tukey-Kramer over the 3 estimable levels' 3 comparisons
        cmp("p (tukey, empty cell design)", (row, "p"), stats.studentized_range.sf(abs(row["t"]) * math.sqrt(2), 3, fit.df), absolute=True)
    rows = saved


def main():
    os.makedirs(os.path.dirname(DATA), exist_ok=True)
    with open(DATA, "w") as f:
        f.write(make_data())
    load()
    exe = os.path.join(ROOT, "target", "release", "covey")
    js = "/tmp/outside_check.json"
    subprocess.run([exe, "render", DOC, "--out", "/tmp", "--json", js], check=True, capture_output=True)
    doc = json.load(open(js))
    tbl = tables(doc)
    y = [r["y"] for r in rows]
    par = Fit(design(PAR), y)
    sep = Fit(design(SEP), y)
    check_summary(tbl)
    means_check("par", by_statement(tbl, "table means par for g"), par, PAR, "g", xbar())
    means_check("sep", by_statement(tbl, "table means sep for g at x = 15"), sep, SEP, "g", Fr(15))
    check_slopes(tbl)
    for kind in (1, 2, 3):
        check_anova(tbl, f"table anova sep type {kind}", SEP, kind)
        check_anova(tbl, f"table anova two type {kind}", TWO, kind)
    check_cells(tbl)
    base = {"x": xbar()}
    for method, st in (
        ("tukey", "table differences par for g"),
        ("holm", "table differences par for g correction holm"),
        ("bonferroni", "table differences par for g correction bonferroni"),
        ("sidak", "table differences par for g correction sidak"),
    ):
        check_pairs(tbl, st, par, PAR, method, base)
    check_dunnett(tbl, "table differences par for g versus a", par, PAR, "two")
    check_dunnett(tbl, "table differences par for g versus a above", par, PAR, "above")
    check_dunnett(tbl, "table differences par for g versus a below", par, PAR, "below")
    check_robust(tbl)
    check_weighted(tbl)
    check_log(tbl)
    check_fit(tbl)
    check_diagnostics(tbl)
    check_plan(tbl)
    check_more(tbl)
    check_oneway_dunnett(tbl)
    check_extra(tbl)
    check_holes(tbl)
    with open(OUT, "w") as f:
        json.dump({"scipy": __import__("scipy").__version__, "numpy": np.__version__, "checks": records}, f, indent=1)
        f.write("\n")
    print(f"{len(records)} comparisons written to {os.path.relpath(OUT, ROOT)}")
    print()
    print("| quantity | worst LRE |")
    print("| :-- | --: |")
    for q, v in worst.items():
        print(f"| {q} | {v:.1f} |")


if __name__ == "__main__":
    sys.exit(main())
