#!/usr/bin/env python3
"""A second independent check of the numbers covey prints, on cases the first
(outside_check.py) does not cover: a factor-by-factor-by-covariate model, two covariates with
their product, a weighted model with a power of the covariate, transforms, adjusted means at
chosen covariate values and by cell, differences within the levels of a second factor with
every correction (plain and HC3), Dunnett below a control, contrasts at chosen values,
weighted slopes and their equality test, Johnson-Neyman regions, `check` on two-factor and
two-covariate models, plans from a pilot model (residual SD, partial correlation, upper
confidence limit of sigma) and the power figure's numbers, and a weighted model with an
empty cell.

The data (tests/reference/outside2/outside2.csv, made by this script) are invented, not
measured. References: exact rational least squares (Python's fractions) wherever the quantity
is rational; scipy (version in reference.json) for distribution functions (t, f, chi2, ncf,
studentized_range, multivariate_t, dunnett), shapiro and levene(center='median'); the exact
product-form integral of comparisons.py for one-way Dunnett.

Rerun (after `cargo build --release`):
    python3 -m pip install scipy numpy
    python3 tests/reference/outside2_check.py

It writes every comparison with its reference value and tolerance to
tests/reference/outside2/reference.json, which `tests/outside.rs` checks covey against (the
Rust test never runs Python), and prints the worst log relative error (LRE) per quantity.
"""
import json
import math
import os
import random
import re
import subprocess
import sys
from fractions import Fraction as Fr

import numpy as np
from scipy import optimize, stats

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from comparisons import product_form_cdf, product_form_quantile  # noqa: E402
from outside_check import dot, inverse, plan_power, quad, solve, sqrt_fr  # noqa: E402

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(os.path.dirname(HERE))
DOC = os.path.join(HERE, "outside2", "outside2.md")
DATA = os.path.join(HERE, "outside2", "outside2.csv")
OUT = os.path.join(HERE, "outside2", "reference.json")


def make_data():
    """Invented, not measured: three groups g crossed with two levels of h in unequal cells
    (a/p 5, a/q 3, b/p 4, b/q 6, c/p 6, c/q 3), covariates x near 20 and z near 5, a response
    y with separate slopes by group and an x-by-z part, case weights w, the same weights v with
    three rows weighted 0, and a copy m of x with two cells missing."""
    random.seed(2718)
    rows = ["g,h,x,z,y,w,v,m"]
    k = 0
    cells = [("a", "p", 5), ("a", "q", 3), ("b", "p", 4), ("b", "q", 6), ("c", "p", 6), ("c", "q", 3)]
    shift = {"a": 0, "b": 1.5, "c": -1}
    hs = {"p": 0, "q": 0.8}
    slope = {"a": 0.6, "b": 0.8, "c": 0.5}
    for g, h, n in cells:
        for i in range(n):
            x = round(random.uniform(10, 30), 2)
            z = round(random.uniform(2, 8), 1)
            y = 4 + shift[g] + hs[h] + slope[g] * x + 0.9 * z + 0.04 * (x - 20) * (z - 5)
            y = round(y + random.gauss(0, 1.5 * (1 + (g == "c"))), 2)
            w = random.choice([1, 2, 3, 0.5])
            k += 1
            # v: the weights with three rows weighted 0; m: x with two cells left empty
            v = 0 if k in (2, 10, 20) else w
            m = "" if k in (4, 15) else x
            rows.append(f"{g},{h},{x},{z},{y},{w},{v},{m}")
    return "\n".join(rows) + "\n"


# ---------------------------------------------------------------- exact linear algebra


def bilinear(a, b, v):
    return dot(a, [dot(r, b) for r in v])


class Fit:
    """Least squares of y on the columns of x with case weights w (exact). Columns that are
    all zero (the product of an empty cell) are aliased and left out; `keep` says which were
    kept."""

    def __init__(self, x, y, w=None):
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
        self._hc3 = None

    def cut(self, l):
        """A row of coefficients of the full design, on the columns kept."""
        return [l[j] for j in self.keep] if len(l) != self.p else l

    def at(self, l):
        return dot(self.cut(l), self.b)

    def var(self, l, robust=False):
        l = self.cut(l)
        return quad(l, self.hc3()) if robust else quad(l, self.xtxi) * self.s2

    def cov(self, a, b, robust=False):
        a, b = self.cut(a), self.cut(b)
        return bilinear(a, b, self.hc3()) if robust else bilinear(a, b, self.xtxi) * self.s2

    def hc3(self):
        """(X'WX)^-1 X'W diag(e_i^2 / (1 - h_i)^2) W X (X'WX)^-1, exact."""
        if self._hc3 is None:
            p = self.p
            meat = [[Fr(0)] * p for _ in range(p)]
            for i in range(self.n):
                c = self.w[i] ** 2 * self.e[i] ** 2 / (1 - self.h[i]) ** 2
                xi = self.x[i]
                for a in range(p):
                    for b in range(p):
                        meat[a][b] += c * xi[a] * xi[b]
            left = [[dot(self.xtxi[a], [meat[k][b] for k in range(p)]) for b in range(p)] for a in range(p)]
            self._hc3 = [[dot(left[a], [self.xtxi[k][b] for k in range(p)]) for b in range(p)] for a in range(p)]
        return self._hc3


# ---------------------------------------------------------------- data, terms and designs

LEVELS = {"g": ["a", "b", "c"], "h": ["p", "q"]}
ALL = []
rows = []


def load():
    with open(DATA) as f:
        head = f.readline().strip().split(",")
        for i, line in enumerate(f):
            cells = dict(zip(head, line.strip().split(",")))
            for k in ("x", "z", "y", "w", "v", "m"):
                cells[k] = Fr(cells[k]) if cells[k] != "" else None
            cells["line"] = i + 2
            ALL.append(cells)
    rows.extend(ALL)


def numeric(part, r):
    """The value of a numeric part in row (or point) r: a column, a power of one, or its log or
    square root. log and sqrt are not rational: their double values (as covey's own columns
    hold them) are taken exactly as fractions."""
    m = re.fullmatch(r"(\w+)\^(\d+)", part)
    if m:
        return r[m.group(1)] ** int(m.group(2))
    m = re.fullmatch(r"(log|sqrt)\((\w+)\)", part)
    if m:
        v = float(r[m.group(2)])
        return Fr(math.log(v) if m.group(1) == "log" else math.sqrt(v))
    return r[part]


def column_parts(term, r, coding):
    """The values of a term's columns in row r. A factor part expands by `coding` ('ref':
    dummies of levels 2..k; 'sum': level i minus the last level); in a point, a factor maps to
    {level: weight} (an average over its levels)."""
    vals = [Fr(1)]
    for part in term:
        if part in LEVELS:
            lv = LEVELS[part]
            at = r[part] if isinstance(r[part], dict) else {r[part]: Fr(1)}
            if coding == "ref":
                d = [at.get(l, Fr(0)) for l in lv[1:]]
            else:
                d = [at.get(l, Fr(0)) - at.get(lv[-1], Fr(0)) for l in lv[:-1]]
            vals = [v * u for v in vals for u in d]
        else:
            vals = [v * numeric(part, r) for v in vals]
    return vals


def design(terms, coding="ref", at=None):
    out = []
    for r in rows if at is None else [at]:
        row = [Fr(1)]
        for t in terms:
            row += column_parts(t, r, coding)
        out.append(row)
    return out


def fit(terms, weighted=False, coding="ref"):
    y = [r["y"] for r in rows]
    w = [r["w"] for r in rows] if weighted else None
    return Fit(design(terms, coding), y, w)


def mean_of(col):
    return sum(r[col] for r in rows) / len(rows)


def even(f):
    k = len(LEVELS[f])
    return {l: Fr(1, k) for l in LEVELS[f]}


def point(terms, **given):
    """The row of coefficients of the prediction at a point: each factor averaged evenly
    unless given, each covariate at its mean unless given."""
    p = {"g": even("g"), "h": even("h")}
    for c in ("x", "z", "m"):
        if all(r[c] is not None for r in rows):
            p[c] = mean_of(c)
    for k, v in given.items():
        p[k] = {v: Fr(1)} if isinstance(v, str) else v
    return design(terms, "ref", p)[0]


# ---------------------------------------------------------------- comparison bookkeeping

worst = {}
records = []
texts = []

# Tolerances the Rust test applies, as in outside_check.py: exact rational arithmetic and
# scipy's t, F and chi-square agree with covey to about 1e-13, so 1e-10 relative leaves room
# for rounding only; scipy's studentized range is 1 - cdf with an absolute error near 1e-11;
# scipy's Shapiro-Wilk uses single-precision coefficients in places (1e-7); Dunnett p: covey
# states 1e-5 (absolute), scipy's randomised multivariate t and dunnett add their own error;
# Dunnett limits are judged against their half-width; the Johnson-Neyman bounds carry the t
# quantile (scipy's ppf, good to 1e-12 or so) through a square root.
TOLERANCES = {
    "rel": 1e-10,
    # the one-way ANOVA of a covariate is closed-form arithmetic on the data: held to 1e-13,
    # which a covariate near 1e6 whose group means were rounded before their differences were
    # taken (1.5e-11) does not meet
    "tight": 1e-13,
    "studentized range": 1e-9,
    "shapiro": 1e-7,
    "dunnett exact": 1e-5,
    "dunnett mvt": 2e-5,
    "dunnett scipy": 1e-4,
    "dunnett limit": 2e-4,
    "dunnett scipy limit": 2e-3,
}


def mode_of(quantity):
    if quantity.startswith("balance F"):
        return "tight"
    if "Shapiro" in quantity:
        return "shapiro"
    if "Dunnett" in quantity:
        if "scipy" in quantity:
            return "dunnett scipy limit" if "limit" in quantity else "dunnett scipy"
        if "limit" in quantity:
            return "dunnett limit"
        return "dunnett exact" if "exact" in quantity else "dunnett mvt"
    if "tukey" in quantity.lower() and quantity.startswith("p"):
        return "studentized range"
    return "rel"


def cmp(quantity, where, ref, absolute=False, scale=None):
    """Records the LRE of covey's value (`where`: a table row and a column key) against the
    reference (relative to `scale` when given; absolute for probabilities from integration)."""
    row, key = where
    covey = row[key]
    if covey is None or ref is None:
        print(f"MISSING {quantity}: covey {covey} reference {ref}")
        worst[quantity] = -99
        return
    mode = mode_of(quantity)
    records.append({
        "quantity": quantity, "statement": row["__at"][0], "kind": row["__at"][1],
        "row": row["__at"][2], "column": key, "reference": float(ref),
        "scale": None if scale is None else float(abs(scale)),
        "absolute": bool(absolute), "tolerance": TOLERANCES[mode],
    })
    ref = float(ref)
    if scale is not None:
        d = abs(covey - ref) / abs(scale)
    elif absolute:
        d = abs(covey - ref)
    else:
        d = abs(covey - ref) / max(abs(ref), 1e-300)
    v = 15.0 if d == 0 else min(15.0, -math.log10(d))
    worst[quantity] = min(worst.get(quantity, 99), v)
    if v < -math.log10(TOLERANCES[mode]):
        print(f"BEYOND TOLERANCE {quantity} ({row['__at'][0]}, row {row['__at'][2]}, {key}): covey {covey!r} reference {ref!r} ({v:.1f})")


def undefined(quantity, where):
    """covey must show this value as undefined (null in JSON, — in Markdown)."""
    row, key = where
    records.append({
        "quantity": quantity + " shown as undefined", "statement": row["__at"][0],
        "kind": row["__at"][1], "row": row["__at"][2], "column": key, "reference": None,
        "scale": None, "absolute": False, "tolerance": 0.0,
    })
    ok = row[key] is None
    worst[quantity + " shown as undefined"] = 15.0 if ok else -99
    if not ok:
        print(f"NOT UNDEFINED {quantity}: covey {row[key]}")


def text(quantity, needle, source):
    """A sentence covey must write (in the rendered Markdown), with numbers from `source`."""
    texts.append({"quantity": quantity, "text": needle, "source": source})


def tables(doc):
    out = {}
    for t in doc["outputs"]:
        for i, r in enumerate(t.get("rows", [])):
            r["__at"] = (t["statement"], t["kind"], i)
        out.setdefault(t["statement"], []).append(t)
    return out


TBL = {}


def table(statement, kind=None):
    for t in TBL[statement]:
        if kind is None or t["kind"] == kind:
            return t
    raise KeyError(statement)


# ---------------------------------------------------------------- the models

FF = [("g",), ("h",), ("g", "h"), ("x",), ("g", "x"), ("h", "x"), ("g", "h", "x")]
XZ = [("g",), ("x",), ("z",), ("x", "z")]
PW = [("g",), ("x",), ("x^2",)]
TR = [("g",), ("log(x)",), ("sqrt(z)",)]
WSEP = [("g",), ("x",), ("g", "x")]
WPAR = [("g",), ("x",)]
HX = [("g",), ("h",), ("g", "h"), ("x",)]
PZ = [("g",), ("x",), ("z",)]
HOLES = [("g",), ("h",), ("g", "h"), ("x",), ("z",)]


def name(term):
    return " by ".join(term)


# ---------------------------------------------------------------- the checks


def check_anova(statement, terms, kind, weighted=False):
    """Sums of squares as differences of residual sums of squares of nested fits: Type I
    sequential, Type II after the terms that do not contain the term (containment by the
    parts a term is made of), Type III after all others in sum-to-zero coding."""
    coding = "sum" if kind == 3 else "ref"
    full = fit(terms, weighted, coding)
    t = table(statement)
    for row in t["rows"]:
        if row["term"] in ("residual", "total"):
            if row["term"] == "residual":
                cmp(f"residual SS (Type {kind})", (row, "ss"), full.rss)
            continue
        term = next(u for u in terms if name(u) == row["term"])
        idx = terms.index(term)
        if kind == 1:
            small, big = terms[:idx], terms[: idx + 1]
        elif kind == 2:
            small = [u for u in terms if not set(term) <= set(u)]
            big = small + [term]
        else:
            small, big = [u for u in terms if u != term], terms
        fs, fb = fit(small, weighted, coding), fit(big, weighted, coding)
        ss = fs.rss - fb.rss
        q = len(fb.keep) - len(fs.keep)
        f = ss / q / full.s2
        cmp(f"SS (Type {kind})", (row, "ss"), ss)
        cmp(f"F (Type {kind})", (row, "f"), f)
        cmp(f"p from F (Type {kind})", (row, "p"), stats.f.sf(float(f), q, full.df))
        cmp("partial eta squared", (row, "partial_eta_sq"), ss / (ss + full.rss))


def check_coefficients(statement, terms, weighted, level):
    fm = fit(terms, weighted)
    q = stats.t.ppf(0.5 + level / 2, fm.df)
    for i, row in enumerate(table(statement)["rows"]):
        l = [Fr(int(j == i)) for j in range(fm.p)]
        est, se = fm.b[i], sqrt_fr(fm.var(l))
        cmp("coefficient", (row, "estimate"), est)
        cmp("coefficient: SE", (row, "se"), se)
        cmp("coefficient: p", (row, "p"), 2 * stats.t.sf(abs(float(est)) / se, fm.df))
        cmp("coefficient: limits", (row, "lower"), float(est) - q * se, scale=q * se)
        cmp("coefficient: limits", (row, "upper"), float(est) + q * se, scale=q * se)


def check_fit(statement, terms, weighted):
    fm = fit(terms, weighted)
    row = table(statement)["rows"][0]
    w, y = fm.w, fm.y
    ybar = dot(w, y) / sum(w)
    tss = sum(wi * (v - ybar) ** 2 for wi, v in zip(w, y))
    n, p = fm.n, fm.p
    r2 = 1 - fm.rss / tss
    cmp("R squared (weighted: about the weighted mean)", (row, "r_squared"), r2)
    cmp("adjusted R squared", (row, "adj_r_squared"), 1 - (1 - r2) * Fr(n - 1, n - p))
    f = (tss - fm.rss) / (p - 1) / fm.s2
    cmp("overall F", (row, "f"), f)
    cmp("overall p", (row, "p"), stats.f.sf(float(f), p - 1, fm.df))
    cmp("residual SD", (row, "sigma"), sqrt_fr(fm.s2))
    # Gaussian log-likelihood with case weights (variance sigma^2 / w_i): the weights add
    # half the sum of their logs.
    ll = -n / 2 * (math.log(2 * math.pi) + math.log(float(fm.rss / n)) + 1)
    ll += sum(math.log(float(v)) for v in w) / 2
    cmp("AIC (weights' share of the likelihood)", (row, "aic"), -2 * ll + 2 * (p + 1))
    cmp("BIC (weights' share of the likelihood)", (row, "bic"), -2 * ll + math.log(n) * (p + 1))


def check_means(statement, terms, weighted=False, robust=False, level=0.95, **at):
    fm = fit(terms, weighted)
    q = stats.t.ppf(0.5 + level / 2, fm.df)
    for row in table(statement)["rows"]:
        l = point(terms, g=row["level"], **at) if "level" in row and row["level"] in LEVELS["g"] else point(terms, h=row["level"], **at)
        est, se = fm.at(l), sqrt_fr(fm.var(l, robust))
        what = "adjusted mean" + (" (robust)" if robust else "")
        cmp(what, (row, "mean"), est)
        cmp(what + ": SE", (row, "se"), se)
        cmp(what + ": limits", (row, "lower"), float(est) - q * se, scale=q * se)
        cmp(what + ": limits", (row, "upper"), float(est) + q * se, scale=q * se)


def check_cells(statement, terms, a, b, weighted=False, **at):
    fm = fit(terms, weighted)
    q = stats.t.ppf(0.975, fm.df)
    for row in table(statement)["rows"]:
        n = sum(1 for r in rows if r[a] == row["level"] and r[b] == row["by"])
        cmp("cell rows", (row, "rows"), n)
        l = point(terms, **{a: row["level"], b: row["by"]}, **at)
        if not estimable(fm, l):
            undefined("cell mean of an empty cell", (row, "mean"))
            undefined("cell mean of an empty cell: SE", (row, "se"))
            continue
        est, se = fm.at(l), sqrt_fr(fm.var(l))
        cmp("cell mean", (row, "mean"), est)
        cmp("cell mean: SE", (row, "se"), se)
        cmp("cell mean: limits", (row, "lower"), float(est) - q * se, scale=q * se)


def estimable(fm, l):
    """l is estimable when it puts no weight on an aliased (all-zero) column; in these designs
    the only aliased columns are products of the empty cell, and a combination is estimable
    exactly when it does not involve them (checked: the row space of the design)."""
    drop = [j for j in range(len(l)) if j not in fm.keep]
    return all(l[j] == 0 for j in drop)


def pairs_of(rows_, key_within):
    return [(r.get(key_within), r["first"], r["second"]) for r in rows_]


def adjust(method, raw, m, side="two"):
    if method in ("bonferroni",):
        return [min(1.0, p * m) for p in raw]
    if method == "sidak":
        return [-math.expm1(m * math.log1p(-p)) for p in raw]
    if method == "holm":
        order = sorted(range(m), key=lambda i: raw[i])
        ps = [0.0] * m
        run = 0.0
        for rank, i in enumerate(order):
            run = max(run, min(1.0, (m - rank) * raw[i]))
            ps[i] = run
        return ps
    if method == "none":
        return raw
    raise ValueError(method)


def critical(method, m, k, df, level=0.95):
    if method == "bonferroni":
        return stats.t.ppf(1 - (1 - level) / (2 * m), df)
    if method == "sidak":
        return stats.t.ppf(1 - (1 - level ** (1 / m)) / 2, df)
    if method == "tukey":
        return stats.studentized_range.ppf(level, k, df) / math.sqrt(2)
    return None


def check_differences(statement, terms, factor, method, weighted=False, robust=False, within=None, level=0.95, **at):
    """All pairs of `factor` (within each level of `within`), with the correction counted in
    each level of `within` over the estimable comparisons only."""
    fm = fit(terms, weighted)
    t = table(statement)
    groups = {}
    for row in t["rows"]:
        groups.setdefault(row.get("within"), []).append(row)
    tag = " (robust)" if robust else ""
    for w_level, rs in groups.items():
        made = []
        for row in rs:
            given = dict(at)
            if within:
                given[within] = w_level
            la = point(terms, **{factor: row["first"]}, **given)
            lb = point(terms, **{factor: row["second"]}, **given)
            l = [u - v for u, v in zip(la, lb)]
            if not estimable(fm, l):
                undefined("difference not estimable (empty cell)", (row, "estimate"))
                undefined("difference not estimable (empty cell): p", (row, "p"))
                continue
            est, se = fm.at(l), sqrt_fr(fm.var(l, robust))
            cmp("difference" + tag, (row, "estimate"), est)
            cmp("difference: SE" + tag, (row, "se"), se)
            cmp("difference: t" + tag, (row, "t"), float(est) / se)
            made.append((row, est, se, 2 * stats.t.sf(abs(float(est)) / se, fm.df)))
        m = len(made)
        if method == "tukey":
            k = len({r["first"] for r, *_ in made} | {r["second"] for r, *_ in made})
            ps = [stats.studentized_range.sf(abs(float(e)) / s * math.sqrt(2), k, fm.df) for _, e, s, _ in made]
        else:
            k = None
            ps = adjust(method, [p for *_, p in made], m)
        q = critical(method, m, k, fm.df, level)
        for (row, est, se, _), p in zip(made, ps):
            cmp(f"p ({method}{', within' if within else ''}{tag})", (row, "p"), p, absolute=method == "tukey")
            if q is not None:
                cmp(f"difference limits ({method}{tag})", (row, "lower"), float(est) - q * se, scale=q * se)
                cmp(f"difference limits ({method}{tag})", (row, "upper"), float(est) + q * se, scale=q * se)


def check_versus(statement, terms, control, side, method, robust=False, weighted=False, level=0.95, within=None):
    """Comparisons with a control: Dunnett from scipy's multivariate_t with the design's
    correlations (plain or HC3), or a correction of raw (one- or two-sided) p with its
    limits (Bonferroni: t at 1 - alpha / m on one side, alpha / 2m on two); with `within`,
    in each level of that factor on its own."""
    if within:
        for lv in LEVELS[within]:
            versus_rows(statement, terms, control, side, method, robust, weighted, level, within, lv)
    else:
        versus_rows(statement, terms, control, side, method, robust, weighted, level, None, None)


def versus_rows(statement, terms, control, side, method, robust, weighted, level, within, at):
    fm = fit(terms, weighted)
    t = table(statement)
    ls, got = [], []
    given = {within: at} if within else {}
    for row in t["rows"]:
        if within and row["within"] != at:
            continue
        l = [u - v for u, v in zip(point(terms, g=row["first"], **given), point(terms, g=control, **given))]
        est, se = fm.at(l), sqrt_fr(fm.var(l, robust))
        tag = " (robust)" if robust else ""
        cmp("difference from control" + tag, (row, "estimate"), est)
        cmp("difference from control: SE" + tag, (row, "se"), se)
        ls.append(l)
        got.append((row, est, se))
    k = len(ls)
    if method == "dunnett":
        cov = np.array([[float(fm.cov(a, b, robust)) for b in ls] for a in ls])
        sd = np.sqrt(np.diag(cov))
        mvt = stats.multivariate_t(loc=np.zeros(k), shape=cov / np.outer(sd, sd), df=fm.df, seed=12345)
        for row, est, se in got:
            tv = float(est) / se
            if side == "two":
                p = 1 - mvt.cdf(np.full(k, abs(tv)), lower_limit=np.full(k, -abs(tv)), maxpts=5_000_000)
            elif side == "above":
                p = 1 - mvt.cdf(np.full(k, tv), maxpts=5_000_000)
            else:
                p = 1 - mvt.cdf(np.full(k, np.inf), lower_limit=np.full(k, tv), maxpts=5_000_000)
            cmp(f"p (Dunnett {side}{', robust' if robust else ''}, scipy multivariate_t)", (row, "p"), p, absolute=True)
    else:
        raw = []
        for row, est, se in got:
            tv = float(est) / se
            raw.append({"two": 2 * stats.t.sf(abs(tv), fm.df), "above": stats.t.sf(tv, fm.df), "below": stats.t.cdf(tv, fm.df)}[side])
        for (row, _, _), p in zip(got, adjust(method, raw, k)):
            cmp(f"p ({method}, versus, {side})", (row, "p"), p)
        m = {"bonferroni": k, "none": 1}.get(method)
        if m is not None:
            a = (1 - level) / m
            q = stats.t.ppf(1 - (a if side != "two" else a / 2), fm.df)
            for row, est, se in got:
                if side in ("two", "above"):
                    cmp(f"limit ({method}, versus, {side})", (row, "lower"), float(est) - q * se, scale=q * se)
                else:
                    undefined(f"lower limit ({method}, versus, below)", (row, "lower"))
                if side in ("two", "below"):
                    cmp(f"limit ({method}, versus, {side})", (row, "upper"), float(est) + q * se, scale=q * se)
                else:
                    undefined(f"upper limit ({method}, versus, above)", (row, "upper"))


def check_oneway_below():
    """scipy.stats.dunnett (alternative='less') and the exact product-form integral on the
    raw groups, control c, one-sided below."""
    samples = {l: [float(r["y"]) for r in rows if r["g"] == l] for l in LEVELS["g"]}
    others = ["a", "b"]
    res = stats.dunnett(*[samples[l] for l in others], control=samples["c"], alternative="less",
                        random_state=np.random.default_rng(1))
    ci = res.confidence_interval(0.95)
    t = table("table differences ow for g versus c below")
    n0 = len(samples["c"])
    lam = [math.sqrt(len(samples[l]) / (len(samples[l]) + n0)) for l in others]
    df = sum(len(v) for v in samples.values()) - len(samples)
    crit = product_form_quantile(0.95, lam, df, False)
    for row in t["rows"]:
        i = others.index(row["first"])
        exact = 1 - product_form_cdf(-row["t"], lam, df, False)
        cmp("p (Dunnett one-way below vs exact product-form integral)", (row, "p"), exact, absolute=True)
        se = row["se"]
        cmp("Dunnett upper limit (below) vs exact critical value", (row, "upper"), row["estimate"] + crit * se, scale=crit * se)
        cmp("p (Dunnett one-way below vs scipy.stats.dunnett)", (row, "p"), res.pvalue[i], absolute=True)
        cmp("Dunnett upper limit (below) vs scipy.stats.dunnett", (row, "upper"), ci.high[i], scale=crit * se)
        undefined("Dunnett lower limit of a below comparison", (row, "lower"))


def check_contrast(statement, terms, weights, robust, level, weighted=False, **at):
    fm = fit(terms, weighted)
    l = [Fr(0)] * len(point(terms))
    for lv, wt in zip(LEVELS["g"], weights):
        l = [u + Fr(wt) * v for u, v in zip(l, point(terms, g=lv, **at))]
    row = table(statement)["rows"][0]
    est, se = fm.at(l), sqrt_fr(fm.var(l, robust))
    q = stats.t.ppf(0.5 + level / 2, fm.df)
    tag = " (robust)" if robust else ""
    cmp("contrast" + tag, (row, "estimate"), est)
    cmp("contrast: SE" + tag, (row, "se"), se)
    cmp("contrast: p" + tag, (row, "p"), 2 * stats.t.sf(abs(float(est)) / se, fm.df))
    cmp("contrast: limits" + tag, (row, "lower"), float(est) - q * se, scale=q * se)
    cmp("contrast: limits" + tag, (row, "upper"), float(est) + q * se, scale=q * se)


def check_slopes(statement):
    """Slopes of x by level of g in the weighted separate-slopes model, and the equal-slopes F
    (weighted residual sums of squares)."""
    sep, par = fit(WSEP, True), fit(WPAR, True)
    q = stats.t.ppf(0.975, sep.df)
    for row in table(statement, "slopes")["rows"]:
        l = [Fr(0)] * sep.p
        l[3] = Fr(1)
        if row["level"] != "a":
            l[4 + LEVELS["g"].index(row["level"]) - 1] = Fr(1)
        est, se = dot(l, sep.b), sqrt_fr(sep.var(l))
        cmp("slope (weighted)", (row, "slope"), est)
        cmp("slope: SE (weighted)", (row, "se"), se)
        cmp("slope: p (weighted)", (row, "p"), 2 * stats.t.sf(abs(float(est)) / se, sep.df))
        cmp("slope: limits (weighted)", (row, "lower"), float(est) - q * se, scale=q * se)
    row = table(statement, "slopes-equality")["rows"][0]
    f = (par.rss - sep.rss) / 2 / sep.s2
    cmp("equal-slopes F (weighted)", (row, "f"), f)
    cmp("equal-slopes p (weighted)", (row, "p"), stats.f.sf(float(f), 2, sep.df))


def check_compare():
    sep, par = fit(WSEP, True), fit(WPAR, True)
    row = table("table compare wpar, wsep")["rows"][0]
    f = (par.rss - sep.rss) / 2 / sep.s2
    cmp("compare: RSS (weighted)", (row, "rss_smaller"), par.rss)
    cmp("compare: RSS (weighted)", (row, "rss_larger"), sep.rss)
    cmp("compare: extra SS (weighted)", (row, "extra_ss"), par.rss - sep.rss)
    cmp("compare: F (weighted)", (row, "f"), f)
    cmp("compare: p (weighted)", (row, "p"), stats.f.sf(float(f), 2, sep.df))


def check_regions():
    """Johnson-Neyman: the x where (d0 + d1 x)^2 = t^2 (v00 + 2 v01 x + v11 x^2), d the
    difference a - b in the separate-slopes model (weighted), v its covariance; the roots of
    that quadratic (exact coefficients apart from t^2 from scipy)."""
    fm = fit(WSEP, True)
    l0 = [u - v for u, v in zip(point(WSEP, g="a", x=Fr(0)), point(WSEP, g="b", x=Fr(0)))]
    l1 = [u - v for u, v in zip(point(WSEP, g="a", x=Fr(1)), point(WSEP, g="b", x=Fr(1)))]
    l1 = [u - v for u, v in zip(l1, l0)]
    d0, d1 = fm.at(l0), fm.at(l1)
    v00, v01, v11 = fm.cov(l0, l0), fm.cov(l0, l1), fm.cov(l1, l1)
    t2 = Fr(stats.t.ppf(0.975, fm.df) ** 2)
    a = d1 * d1 - t2 * v11
    b = 2 * (d0 * d1 - t2 * v01)
    c = d0 * d0 - t2 * v00
    disc = b * b - 4 * a * c
    r1 = (-b - sqrt_fr(disc)) / (2 * a) if a != 0 else None
    r2 = (-b + sqrt_fr(disc)) / (2 * a) if a != 0 else None
    lo, hi = sorted([float(r1), float(r2)])
    row = table("table regions wsep of x for g between a and b")["rows"][0]
    cmp("Johnson-Neyman bound", (row, "lower_bound"), lo)
    cmp("Johnson-Neyman bound", (row, "upper_bound"), hi)
    inside = a < 0  # the squared t exceeds the critical value between the roots when a < 0
    want = "where x is between the bounds" if inside else "where x is outside the bounds"
    if row["significant"] != want:
        print(f"WRONG REGION: covey {row['significant']!r}, reference {want!r}")
        worst["Johnson-Neyman side"] = -99
    cmp("observed range", (row, "observed_min"), min(r["x"] for r in rows))
    cmp("observed range", (row, "observed_max"), max(r["x"] for r in rows))


def check_checks(statement, terms, weighted=False):
    fm = fit(terms, weighted)
    y = [r["y"] for r in rows]
    w = [r["w"] for r in rows] if weighted else None
    e = [math.sqrt(float(wi)) * float(v) for wi, v in zip(fm.w, fm.e)]
    sw = stats.shapiro(e)
    for r in table(statement, "check")["rows"]:
        what = r["check"]
        if what.startswith("normality"):
            cmp("Shapiro-Wilk W", (r, "statistic"), sw.statistic)
            cmp("Shapiro-Wilk p", (r, "p"), sw.pvalue)
        elif "spread" in what:
            f = what.split("across ")[1].split(" ")[0]
            groups = [[e[i] for i, rr in enumerate(rows) if rr[f] == l] for l in LEVELS[f]]
            bf = stats.levene(*groups, center="median")
            cmp("Brown-Forsythe F (each factor)", (r, "statistic"), bf.statistic)
            cmp("Brown-Forsythe p (each factor)", (r, "p"), bf.pvalue)
        elif what.startswith("balance"):
            cov, f = re.match(r"balance of (\w+) across (\w+)", what).groups()
            groups = [[rr[cov] for rr in rows if rr[f] == l] for l in LEVELS[f]]
            groups = [g for g in groups if g]
            allv = [v for g in groups for v in g]
            grand = sum(allv) / len(allv)
            between = sum(len(g) * (sum(g) / len(g) - grand) ** 2 for g in groups)
            within = sum(sum((v - sum(g) / len(g)) ** 2 for v in g) for g in groups)
            df1, df2 = len(groups) - 1, len(allv) - len(groups)
            fv = between / df1 / (within / df2)
            cmp("balance F (exact one-way ANOVA)", (r, "statistic"), fv)
            cmp("balance p", (r, "p"), stats.f.sf(float(fv), df1, df2))
        elif what.startswith("equal slopes"):
            cov, f = re.match(r"equal slopes of (\w+) across (\w+)", what).groups()
            if any(p != cov and cov in p for u in terms for p in u):
                undefined("equal slopes of a transformed covariate", (r, "statistic"))
                continue
            big = fit(terms + [(f, cov)], weighted)
            q = len(big.keep) - fm.p
            stat = (fm.rss - big.rss) / q / big.s2
            cmp("equal-slopes F (check, each pair)", (r, "statistic"), stat)
            cmp("equal-slopes p (check, each pair)", (r, "p"), stats.f.sf(float(stat), q, big.df))
            if r["df"] != f"{q}, {big.df}":
                print(f"WRONG DF {what}: {r['df']} vs {q}, {big.df}")
                worst["equal-slopes df"] = -99
    for r in table(statement, "influence")["rows"]:
        i = next(k for k, rr in enumerate(rows) if rr["line"] == int(r["row"]))
        h = fm.h[i]
        e2 = fm.w[i] * fm.e[i] ** 2
        cmp("leverage", (r, "leverage"), h)
        cmp("Cook's distance", (r, "cooks_distance"), e2 * h / (fm.p * fm.s2 * (1 - h) ** 2))
        s2i = (fm.rss - e2 / (1 - h)) / (fm.df - 1)
        sign = 1 if fm.e[i] > 0 else -1
        cmp("studentized residual", (r, "studentized_residual"), sign * sqrt_fr(e2 / (s2i * (1 - h))))
    # every row past a threshold is listed, and no other
    n, p = fm.n, fm.p
    past = []
    for i in range(n):
        h = fm.h[i]
        e2 = fm.w[i] * fm.e[i] ** 2
        cook = e2 * h / (p * fm.s2 * (1 - h) ** 2)
        s2i = (fm.rss - e2 / (1 - h)) / (fm.df - 1)
        stud2 = e2 / (s2i * (1 - h))
        if h > Fr(2 * p, n) or cook > Fr(4, n) or stud2 > 9:
            past.append(rows[i]["line"])
    listed = [int(r["row"]) for r in table(statement, "influence")["rows"]]
    if listed != past:
        print(f"WRONG INFLUENTIAL ROWS {statement}: covey {listed}, reference {past}")
        worst["influential rows listed"] = -99


def pilot(terms, weighted=False):
    """Residual SD, residual df and the covariates' share r^2 of the RSS of the model without
    its covariate terms."""
    fm = fit(terms, weighted)
    factors = [u for u in terms if all(p in LEVELS for p in u)]
    small = fit(factors, weighted)
    return fm, (small.rss - fm.rss) / small.rss


def n_for(k, f, r2, c, target):
    return next(n for n in range(2, 10000) if plan_power(k, k * n, f, r2, c) >= target)


def check_plans():
    # q1: two covariates from pz; f from means 20, 21, 22 over sigma / sqrt(1 - r2)
    fm, r2 = pilot(PZ)
    row = table("plan q1 for 3 groups with 2 covariates effect means 20, 21, 22 power 0.8 from pz")["rows"][0]
    sd_without = math.sqrt(float(fm.s2 / (1 - r2)))
    cmp("plan from model: r squared (partial, two covariates)", (row, "r_squared"), r2)
    cmp("plan from model: SD without covariates", (row, "sd"), sd_without)
    f = math.sqrt(2 / 3) / sd_without
    cmp("plan from model: f from means", (row, "effect_f"), f)
    n = n_for(3, f, float(r2), 2, 0.8)
    cmp("plan: n per group", (row, "n_per_group"), n)
    cmp("plan power", (row, "power"), plan_power(3, 3 * n, f, float(r2), 2))
    cmp("plan: lambda", (row, "lambda"), 3 * n * f * f / (1 - float(r2)))
    # the warning's upper 80% limit of sigma: sigma sqrt(df / chi2_{0.2}(df)), and its plan
    upper = math.sqrt(float(fm.s2) * fm.df / stats.chi2.ppf(0.2, fm.df))
    text("plan from model: upper 80% limit of sigma (chi-square)",
         f"the one-sided upper 80% confidence limit of its residual SD is {upper:.3f}", "scipy chi2.ppf")
    f_up = math.sqrt(2 / 3) / (upper / math.sqrt(1 - float(r2)))
    text("plan from model: n with the upper limit",
         f"with it the plan needs {n_for(3, f_up, float(r2), 2, 0.8)} per group instead of {n}", "scipy ncf")
    text("plan: power with one fewer",
         f"(with {n - 1}, {plan_power(3, 3 * (n - 1), f, float(r2), 2):.3f})", "scipy ncf")
    # q2: one covariate from the weighted wpar
    fm, r2 = pilot(WPAR, True)
    row = table("plan q2 for 3 groups with 1 covariate effect f 0.3 n 15 from wpar")["rows"][0]
    cmp("plan from model: r squared (partial, weighted)", (row, "r_squared"), r2)
    cmp("plan from model: SD without covariates", (row, "sd"), math.sqrt(float(fm.s2 / (1 - r2))))
    cmp("plan power", (row, "power"), plan_power(3, 45, 0.3, float(r2), 1))
    text("plan from model: partial correlation",
         f"r = {math.copysign(sqrt_fr(r2), float(fm.b[3])):.4f}", "exact")
    # q3: from hx, planned with the upper 80% limit of sigma
    fm, r2 = pilot(HX)
    row = table("plan q3 for 3 groups with 1 covariate effect f 0.3 power 0.9 from hx upper 0.8")["rows"][0]
    upper = math.sqrt(float(fm.s2) * fm.df / stats.chi2.ppf(0.2, fm.df))
    cmp("plan from model: r squared (partial, two factors)", (row, "r_squared"), r2)
    cmp("plan from model: SD without covariates (upper limit of sigma)", (row, "sd"), upper / math.sqrt(1 - float(r2)))
    n3 = n_for(3, 0.3, float(r2), 1, 0.9)
    cmp("plan: n per group", (row, "n_per_group"), n3)
    cmp("plan power", (row, "power"), plan_power(3, 3 * n3, 0.3, float(r2), 1))
    text("plan from model: upper limit of sigma (chi-square)",
         f"planned with its one-sided upper 80% confidence limit {upper:.3g}", "scipy chi2.ppf")
    # The power figures: where each line reaches the target. q3 (target 0.9): R^2 = 0 (no
    # covariate, df2 = N - K) and the plan's R^2; q2 (its power at n = 15 as the mark), by f.
    n0 = n_for(3, 0.3, 0.0, 0, 0.9)
    text("power figure: n where each line reaches the target",
         f"With R² 0 (no covariate) the power reaches 0.9 at {n0} per group. With R² {float(r2):.3g} the power reaches 0.9 at {n3} per group.",
         "scipy ncf")
    fm2, r2b = pilot(WPAR, True)
    mark = plan_power(3, 45, 0.3, float(r2b), 1)
    na, nb = n_for(3, 0.2, float(r2b), 1, mark), n_for(3, 0.4, float(r2b), 1, mark)
    text("power figure: n where each line reaches the target",
         f"With effect f 0.2 the power reaches {mark:.3f} at {na} per group. With effect f 0.4 the power reaches {mark:.3f} at {nb} per group.",
         "scipy ncf")


NX = [("x",)]
NG = [("g",), ("x",)]


def fit_noint(terms):
    """Least squares without the constant column (the design's first column dropped), and
    the full coding of the factor that comes first (one column per level)."""
    x = []
    for r in rows:
        row = []
        for t in terms:
            if t == ("g",):
                row += [Fr(int(r["g"] == l)) for l in LEVELS["g"]]
            else:
                row += column_parts(t, r, "ref")
        x.append(row)
    return Fit(x, [r["y"] for r in rows])


def check_no_intercept():
    """Models without intercept: R squared, F and the total row about 0 (uncorrected sums of
    squares), coefficients of a factor that comes first in full coding."""
    for st, terms in (("table fit nx", NX), ("table fit ng", NG)):
        fm = fit_noint(terms)
        row = table(st)["rows"][0]
        tss = sum(v * v for v in fm.y)
        r2 = 1 - fm.rss / tss
        cmp("R squared without intercept (about 0)", (row, "r_squared"), r2)
        cmp("adjusted R squared without intercept", (row, "adj_r_squared"), 1 - (1 - r2) * Fr(fm.n, fm.df))
        f = (tss - fm.rss) / fm.p / fm.s2
        cmp("overall F without intercept", (row, "f"), f)
        cmp("overall p without intercept", (row, "p"), stats.f.sf(float(f), fm.p, fm.df))
    fm = fit_noint(NX)
    for row in table("table anova nx")["rows"]:
        if row["term"] == "x":
            cmp("SS without intercept", (row, "ss"), sum(v * v for v in fm.y) - fm.rss)
        if row["term"] == "total":
            cmp("uncorrected total SS", (row, "ss"), sum(v * v for v in fm.y))
    fm = fit_noint(NG)
    t = table("table anova ng type 1")["rows"]
    g_only = fit_noint([("g",)])
    cmp("SS without intercept (Type 1)", (t[0], "ss"), sum(v * v for v in fm.y) - g_only.rss)
    cmp("SS without intercept (Type 1)", (t[1], "ss"), g_only.rss - fm.rss)
    for i, row in enumerate(table("table coefficients ng")["rows"]):
        l = [Fr(int(j == i)) for j in range(fm.p)]
        cmp("coefficient without intercept (level means at x = 0)", (row, "estimate"), fm.b[i])
        cmp("coefficient without intercept: SE", (row, "se"), sqrt_fr(fm.var(l)))


def slope_rows(terms, factor, **at):
    """The slope of x in each level of `factor` (other factors averaged evenly, other
    covariates at their means), as rows of coefficients."""
    out = {}
    for lv in LEVELS[factor]:
        l1 = point(terms, **{factor: lv}, **dict(at, x=Fr(1)))
        l0 = point(terms, **{factor: lv}, **dict(at, x=Fr(0)))
        out[lv] = [a - b for a, b in zip(l1, l0)]
    return out


def check_slopes_general(statement, terms, factor):
    """Slopes where other terms hold the covariate (x by z: at z's mean) or the factor and
    the covariate with another factor (g by h by x: averaged over h), and the test that the
    slopes shown are equal: the Wald F of their differences (exact), which is the extra-SS F
    of the factor-by-covariate term when no other term holds both."""
    if (factor, "x") not in terms:
        terms = terms + [(factor, "x")]
    fm = fit(terms)
    sl = slope_rows(terms, factor)
    q = stats.t.ppf(0.975, fm.df)
    for row in table(statement, "slopes")["rows"]:
        l = sl[row["level"]]
        est, se = fm.at(l), sqrt_fr(fm.var(l))
        cmp("slope (other terms hold x or the factor)", (row, "slope"), est)
        cmp("slope: SE (other terms hold x or the factor)", (row, "se"), se)
        cmp("slope: limits (other terms hold x or the factor)", (row, "lower"), float(est) - q * se, scale=q * se)
    first = LEVELS[factor][0]
    L = [[a - b for a, b in zip(sl[lv], sl[first])] for lv in LEVELS[factor][1:]]
    lb = [fm.at(l) for l in L]
    v = [[fm.cov(a, b) for b in L] for a in L]
    f = dot(lb, solve(v, lb)) / len(L)
    row = table(statement, "slopes-equality")["rows"][0]
    cmp("equal-slopes F (Wald, slopes shown)", (row, "f"), f)
    cmp("equal-slopes p (Wald, slopes shown)", (row, "p"), stats.f.sf(float(f), len(L), fm.df))


def check_regions_general(statement, terms, a, b, weighted=False, row_index=0):
    """Johnson-Neyman bounds of a - b where other terms hold x or the factor (other factors
    averaged evenly, other covariates at their means)."""
    if ("g", "x") not in terms:
        terms = terms + [("g", "x")]
    fm = fit(terms, weighted)
    l0 = [u - v for u, v in zip(point(terms, g=a, x=Fr(0)), point(terms, g=b, x=Fr(0)))]
    l1 = [u - v for u, v in zip(point(terms, g=a, x=Fr(1)), point(terms, g=b, x=Fr(1)))]
    l1 = [u - v for u, v in zip(l1, l0)]
    d0, d1 = fm.at(l0), fm.at(l1)
    v00, v01, v11 = fm.cov(l0, l0), fm.cov(l0, l1), fm.cov(l1, l1)
    t2 = Fr(stats.t.ppf(0.975, fm.df) ** 2)
    qa, qb, qc = d1 * d1 - t2 * v11, 2 * (d0 * d1 - t2 * v01), d0 * d0 - t2 * v00
    disc = qb * qb - 4 * qa * qc
    row = table(statement)["rows"][row_index]
    if disc <= 0:
        want = "for every value of x" if qa > 0 else "for no value of x"
        if row["significant"] != want:
            print(f"WRONG REGION {statement}: covey {row['significant']!r}, reference {want!r}")
            worst["Johnson-Neyman side"] = -99
        undefined("Johnson-Neyman bound where there is none", (row, "lower_bound"))
        return
    lo, hi = sorted([float((-qb - sqrt_fr(disc)) / (2 * qa)), float((-qb + sqrt_fr(disc)) / (2 * qa))])
    cmp("Johnson-Neyman bound (other terms hold x or the factor)", (row, "lower_bound"), lo)
    cmp("Johnson-Neyman bound (other terms hold x or the factor)", (row, "upper_bound"), hi)
    want = "where x is between the bounds" if qa < 0 else "where x is below the lower or above the upper bound"
    if row["significant"] != want:
        print(f"WRONG REGION {statement}: covey {row['significant']!r}, reference {want!r}")
        worst["Johnson-Neyman side"] = -99


def check_robust_weighted():
    """HC3 of a weighted fit: (X'WX)^-1 X'W diag(e^2 / (1 - h)^2) W X (X'WX)^-1, h the
    weighted leverages (exact)."""
    fm = fit(PW, True)
    check_means("table means pw for g at x = 25 robust level 0.9", PW, weighted=True, robust=True, level=0.9, x=Fr(25))
    check_differences("table differences pw for g robust", PW, "g", "tukey", weighted=True, robust=True)
    for i, row in enumerate(table("table coefficients pw robust")["rows"]):
        l = [Fr(int(j == i)) for j in range(fm.p)]
        cmp("HC3 coefficient SE (weighted)", (row, "se"), sqrt_fr(fm.var(l, True)))
    cols = {"g": [1, 2], "x": [3], "x^2": [4]}
    for row in table("table anova pw robust")["rows"]:
        if row["term"] not in cols:
            continue
        idx = cols[row["term"]]
        v = fm.hc3()
        vb = [[v[a][b] for b in idx] for a in idx]
        bb = [fm.b[a] for a in idx]
        f = dot(bb, solve(vb, bb)) / len(idx)
        cmp("robust Wald F (weighted)", (row, "f"), f)
        cmp("robust Wald p (weighted)", (row, "p"), stats.f.sf(float(f), len(idx), fm.df))
    # Dunnett above, HC3 correlations of a weighted fit
    t = table("table differences pw for g versus a above robust")
    ls = [[u - v for u, v in zip(point(PW, g=r["first"]), point(PW, g="a"))] for r in t["rows"]]
    cov = np.array([[float(fm.cov(a, b, True)) for b in ls] for a in ls])
    sd = np.sqrt(np.diag(cov))
    mvt = stats.multivariate_t(loc=np.zeros(len(ls)), shape=cov / np.outer(sd, sd), df=fm.df, seed=12345)
    for row, l in zip(t["rows"], ls):
        se = sqrt_fr(fm.var(l, True))
        cmp("difference from control: SE (robust, weighted)", (row, "se"), se)
        p = 1 - mvt.cdf(np.full(len(ls), float(fm.at(l)) / se), maxpts=5_000_000)
        cmp("p (Dunnett above, robust, weighted, scipy multivariate_t)", (row, "p"), p, absolute=True)


def apa_p(p):
    if p < 0.001:
        return "*p* < .001"
    return "*p* = " + f"{p:.3f}"[1:]


def check_reports():
    fm = fit(HX)
    fs = fit([])
    ss = fs.rss - fit([("g",)]).rss
    f = ss / 2 / fm.s2
    p = stats.f.sf(float(f), 2, fm.df)
    eta = ss / (ss + fm.rss)
    text("report: F, p and partial eta squared (Type 1)",
         f"*F*(2, {fm.df}) = {float(f):.2f}, {apa_p(p)}, partial eta squared = {float(eta):.2f}".replace("= 0.", "= ."),
         "exact, scipy f")
    fm = fit(XZ)
    l = [u - v for u, v in zip(point(XZ, g="a"), point(XZ, g="c"))]
    est, se = fm.at(l), sqrt_fr(fm.var(l))
    q = stats.t.ppf(1 - 0.05 / 6, fm.df)
    p = min(1.0, 3 * 2 * stats.t.sf(abs(float(est)) / se, fm.df))
    text("report: difference, Bonferroni limits, t and p",
         f"difference = {float(est):.2f}, 95% CI [{float(est) - q * se:.2f}, {float(est) + q * se:.2f}], *t*({fm.df}) = {float(est) / se:.2f}, {apa_p(p)} (Bonferroni adjusted)",
         "exact, scipy t")


class Rows:
    """The rows a model is fitted to: those with every value it uses (and, weighted, a
    weight above 0; `weights` names the column, copied into w; `response` likewise into y)."""

    def __init__(self, keep, weights="w", response="y"):
        self.keep, self.weights, self.response = keep, weights, response

    def __enter__(self):
        self.saved = list(rows)
        rows[:] = [dict(r, w=r[self.weights], y=r[self.response]) for r in self.saved if self.keep(r)]

    def __exit__(self, *exc):
        rows[:] = self.saved


ZW = [("g",), ("h",), ("x",)]
MM = [("g",), ("m",), ("z",)]


def check_zero_weights_and_missing():
    """Rows of weight 0 are left out of the fit and its df, and rows with a missing value out
    of the model: every number is that of the model fitted to the rows left, with covariates
    at their means over those rows."""
    with Rows(lambda r: r["v"] > 0, "v"):
        check_means("table means zw for g", ZW, weighted=True)
        check_anova("table anova zw", ZW, 2, weighted=True)
        check_fit("table fit zw", ZW, True)
        check_checks("check zw", ZW, weighted=True)
        check_versus("table differences zw for g versus a above correction bonferroni level 0.9", ZW, "a", "above", "bonferroni", weighted=True, level=0.9)
    with Rows(lambda r: r["m"] is not None):
        check_means("table means mm for g", MM)
        check_checks("check mm", MM)
        check_differences("table differences mm for g level 0.99", MM, "g", "tukey", level=0.99)
        check_versus("table differences mm for g versus b correction none", MM, "b", "two", "none")


BIG = [("g",), ("xb",), ("zb",), ("xb", "zb")]
BY = [("g",), ("x",), ("x^2",)]


def check_offsets():
    """Covariates near 10^6 with their product, and a response near 10^8 with a quadratic:
    the columns are the doubles `compute` makes (x + 1e6 rounded), taken exactly, and every
    number is checked against exact least squares on them. Type I and II sums of squares,
    adjusted means and differences are those of the unshifted model; Type III of xb and zb
    (their slopes where the other is 0, far outside the data) are not, and are checked as
    such. The adjusted means are at the exact mean of the covariates: covey's mean is the
    double nearest it (1000020.3099999999, 5.6e-11 off), which alone costs the means and
    their SEs about three of their digits here (at that double they agree to 3e-16)."""
    for r in ALL:
        r["xb"] = Fr(float(r["x"]) + 1e6)
        r["zb"] = Fr(float(r["z"]) + 1e6)
        r["yb"] = Fr(float(r["y"]) + 1e8)
    for kind in (1, 2, 3):
        check_anova(f"table anova big type {kind}", BIG, kind)
    fm = fit(BIG)
    p = {"g": even("g"), "h": even("h"), "xb": mean_of("xb"), "zb": mean_of("zb")}
    q = stats.t.ppf(0.975, fm.df)
    for row in table("table means big for g")["rows"]:
        l = design(BIG, "ref", dict(p, g={row["level"]: Fr(1)}))[0]
        est, se = fm.at(l), sqrt_fr(fm.var(l))
        cmp("adjusted mean (covariates near 1e6)", (row, "mean"), est)
        cmp("adjusted mean: SE (covariates near 1e6)", (row, "se"), se)
        cmp("adjusted mean: limits (covariates near 1e6)", (row, "lower"), float(est) - q * se, scale=q * se)
    for i, row in enumerate(table("table coefficients big")["rows"]):
        l = [Fr(int(j == i)) for j in range(fm.p)]
        cmp("coefficient (covariates near 1e6)", (row, "estimate"), fm.b[i])
        cmp("coefficient: SE (covariates near 1e6)", (row, "se"), sqrt_fr(fm.var(l)))
    t = table("table differences big for g robust")
    for row in t["rows"]:
        la = design(BIG, "ref", dict(p, g={row["first"]: Fr(1)}))[0]
        lb = design(BIG, "ref", dict(p, g={row["second"]: Fr(1)}))[0]
        l = [u - v for u, v in zip(la, lb)]
        cmp("difference (covariates near 1e6)", (row, "estimate"), fm.at(l))
        cmp("difference: SE (robust, covariates near 1e6)", (row, "se"), sqrt_fr(fm.var(l, True)))
    check_checks("check big", BIG)
    with Rows(lambda r: True, response="yb"):
        check_anova("table anova by type 2", BY, 2, weighted=True)
        check_means("table means by for g at x = 25", BY, weighted=True, x=Fr(25))
        check_fit("table fit by", BY, True)
        check_checks("check by", BY, weighted=True)


def check_robust_anova(statement, terms, kind, weighted=False):
    """Robust (HC3) Wald F of Types I and II in a model with an aliased column: the
    hypothesis of a term is L b = 0 with L = X_T' W (I - P0) X, P0 the weighted projection
    on the columns tested before it (Type I: earlier terms; Type II: the terms that do not
    contain it), on the kept columns; F = (Lb)' (L V L')^-1 (Lb) / rank, V the HC3
    covariance (exact)."""
    fm = fit(terms, weighted)
    x = design(terms)
    x = [[r[j] for j in fm.keep] for r in x]
    w = fm.w
    width = [len(column_parts(u, rows[0], "ref")) for u in terms]
    start = [1 + sum(width[:k]) for k in range(len(terms))]
    col_of = {j: k for k, j in enumerate(fm.keep)}
    for row in table(statement)["rows"]:
        names = [name(u) for u in terms]
        if row["term"] not in names:
            continue
        t = names.index(row["term"])
        term = terms[t]
        if kind == 1:
            before = list(range(t))
        else:
            before = [u for u in range(len(terms)) if u != t and not set(term) < set(terms[u])]
        c0 = [0] + [col_of[c] for u in before for c in range(start[u], start[u] + width[u]) if c in col_of]
        ct = [col_of[c] for c in range(start[t], start[t] + width[t]) if c in col_of]
        x0 = [[r[c] for c in c0] for r in x]
        g0 = Fit(x0, [Fr(0)] * len(x), w)
        resid = []
        for j in range(fm.p):
            col = [r[j] for r in x]
            xty = [sum(w[i] * x0[i][a] * col[i] for i in range(len(x))) for a in range(len(c0))]
            b0 = [dot(rw, xty) for rw in g0.xtxi]
            resid.append([col[i] - dot(x0[i], b0) for i in range(len(x))])
        L = [[sum(w[i] * x[i][c] * resid[j][i] for i in range(len(x))) for j in range(fm.p)] for c in ct]
        # drop rows that are combinations of earlier ones (a term's part already in P0)
        keep = []
        for l in L:
            trial = keep + [l]
            gram = [[dot(a, b) for b in trial] for a in trial]
            try:
                inverse(gram)
                keep = trial
            except StopIteration:
                pass
        L = keep
        lb = [dot(l, fm.b) for l in L]
        lvl = [[bilinear(a, b, fm.hc3()) for b in L] for a in L]
        f = dot(lb, solve(lvl, lb)) / len(L)
        cmp(f"robust Wald F (Type {kind}, weighted, empty cell)", (row, "f"), f)
        cmp(f"robust Wald p (Type {kind}, weighted, empty cell)", (row, "p"), stats.f.sf(float(f), len(L), fm.df))
        if row["df"] != len(L):
            print(f"WRONG DF {statement} {row['term']}: {row['df']} vs {len(L)}")
            worst["robust Wald df"] = -99


def check_transform():
    """log(x) and sqrt(z) at the covariates' means: covey evaluates the transform at the mean
    of the column (log of the mean, not the mean of the log)."""
    check_means("table means tr for g", TR)


def main():
    os.makedirs(os.path.dirname(DATA), exist_ok=True)
    with open(DATA, "w") as f:
        f.write(make_data())
    load()
    exe = os.path.join(ROOT, "target", "release", "covey")
    js = "/tmp/outside2_check.json"
    subprocess.run([exe, "render", DOC, "--out", "/tmp/outside2_check", "--json", js], check=True, capture_output=True)
    doc = json.load(open(js))
    TBL.update(tables(doc))
    for kind in (1, 2, 3):
        check_anova(f"table anova ff type {kind}", FF, kind)
        check_anova(f"table anova xz type {kind}", XZ, kind)
        check_anova(f"table anova pw type {kind}", PW, kind, weighted=True)
    check_coefficients("table coefficients pw level 0.99", PW, True, 0.99)
    check_coefficients("table coefficients xz", XZ, False, 0.95)
    check_fit("table fit pw", PW, True)
    check_fit("table fit xz", XZ, False)
    check_means("table means xz for g", XZ)
    check_means("table means xz for g at x = 15, z = 3", XZ, x=Fr(15), z=Fr(3))
    check_means("table means pw for g at x = 25", PW, weighted=True, x=Fr(25))
    check_means("table means pw for g", PW, weighted=True)
    check_transform()
    check_cells("table means ff for g by h at x = 18", FF, "g", "h", x=Fr(18))
    check_cells("table means hx for h by g", HX, "h", "g")
    check_differences("table differences xz for g at x = 15, z = 3 correction holm", XZ, "g", "holm", x=Fr(15), z=Fr(3))
    check_differences("table differences hx for g within h correction bonferroni", HX, "g", "bonferroni", within="h")
    check_differences("table differences hx for g within h correction sidak robust", HX, "g", "sidak", robust=True, within="h")
    check_differences("table differences hx for h within g", HX, "h", "tukey", within="g")
    check_differences("table differences xz for g robust", XZ, "g", "tukey", robust=True)
    check_versus("table differences xz for g versus a robust", XZ, "a", "two", "dunnett", robust=True)
    check_versus("table differences xz for g versus c below correction holm", XZ, "c", "below", "holm")
    check_contrast("table contrast xz for g weights 1, -1, 0 at x = 12 robust level 0.9", XZ, [1, -1, 0], True, 0.9, x=Fr(12))
    check_contrast("table contrast pw for g weights 0.5, 0.5, -1 at x = 25", PW, [Fr(1, 2), Fr(1, 2), -1], False, 0.95, weighted=True, x=Fr(25))
    check_slopes("table slopes wsep of x for g")
    check_slopes("table slopes wpar of x for g")
    check_compare()
    check_regions()
    check_checks("check hx", HX)
    check_checks("check xz", XZ)
    check_checks("check pw", PW, weighted=True)
    check_plans()
    check_oneway_below()
    check_no_intercept()
    check_means("table means ff for g", FF)
    check_differences("table differences ff for g at x = 25 within h correction sidak", FF, "g", "sidak", within="h", x=Fr(25))
    check_slopes_general("table slopes ff of x for g", FF, "g")
    check_slopes_general("table slopes xz of x for g", XZ, "g")
    check_slopes_general("table slopes hx of x for h", HX, "h")
    check_regions_general("table regions ff of x for g between b and c", FF, "b", "c")
    check_regions_general("table regions xz of x for g between a and c", XZ, "a", "c")
    for i, (a, b) in enumerate((("a", "b"), ("a", "c"), ("b", "c"))):
        check_regions_general("table regions wsep of x for g", WSEP, a, b, weighted=True, row_index=i)
    check_robust_weighted()
    check_contrast("table contrast hx for g weights -1, 0.5, 0.5", HX, [-1, Fr(1, 2), Fr(1, 2)], False, 0.95)
    check_checks("check ff", FF)
    check_checks("check tr", TR)
    check_reports()
    check_zero_weights_and_missing()
    check_versus("table differences hx for g versus c below within h", HX, "c", "below", "dunnett", within="h")
    check_offsets()
    # the empty cell: keep where not (g == c and h == q)
    rows[:] = [r for r in ALL if not (r["g"] == "c" and r["h"] == "q")]
    for kind in (1, 2):
        check_anova(f"table anova wholes type {kind}", HOLES, kind, weighted=True)
    check_cells("table means wholes for g by h", HOLES, "g", "h", weighted=True)
    fm = fit(HOLES, True)
    for row in table("table means wholes for h")["rows"]:
        l = point(HOLES, h=row["level"])
        if not estimable(fm, l):
            undefined("adjusted mean averaging over an empty cell", (row, "mean"))
            continue
        cmp("adjusted mean (empty cell, weighted)", (row, "mean"), fm.at(l))
        cmp("adjusted mean: SE (empty cell, weighted)", (row, "se"), sqrt_fr(fm.var(l)))
    check_differences("table differences wholes for g within h correction holm", HOLES, "g", "holm", weighted=True, within="h")
    check_differences("table differences wholes for h within g", HOLES, "h", "tukey", weighted=True, within="g")
    check_differences("table differences wholes for g within h", HOLES, "g", "tukey", weighted=True, within="h")
    fm = fit(HOLES, True)
    for row in table("table means wholes for g")["rows"]:
        l = point(HOLES, g=row["level"])
        if not estimable(fm, l):
            undefined("adjusted mean averaging over an empty cell", (row, "mean"))
            continue
        cmp("adjusted mean (empty cell, weighted)", (row, "mean"), fm.at(l))
        cmp("adjusted mean: SE (empty cell, weighted)", (row, "se"), sqrt_fr(fm.var(l)))
    check_contrast("table contrast wholes for g weights 1, -1, 0", HOLES, [1, -1, 0], False, 0.95, weighted=True)
    check_regions_general("table regions wholes of x for g", HOLES, "a", "b", weighted=True)
    for row in table("table regions wholes of x for g")["rows"][1:]:
        # a - c and b - c compare the empty cell: shown, without bounds (once an error that
        # took the whole table)
        undefined("Johnson-Neyman bound of a pair that is not estimable", (row, "lower_bound"))
        undefined("Johnson-Neyman bound of a pair that is not estimable", (row, "upper_bound"))
    check_robust_anova("table anova wholes type 2 robust", HOLES, 2, weighted=True)
    check_robust_anova("table anova wholes type 1 robust", HOLES, 1, weighted=True)
    fm = fit(HOLES, True)
    for row in table("table means wholes for g by h robust")["rows"]:
        l = point(HOLES, g=row["level"], h=row["by"])
        if not estimable(fm, l):
            undefined("robust cell mean of an empty cell", (row, "mean"))
            continue
        cmp("cell mean: SE (robust, weighted, empty cell)", (row, "se"), sqrt_fr(fm.var(l, True)))

    rendered = open("/tmp/outside2_check/outside2.rendered.md").read()
    for tx in texts:
        ok = tx["text"] in rendered
        worst[tx["quantity"]] = min(worst.get(tx["quantity"], 99), 15.0 if ok else -99)
        if not ok:
            print(f"TEXT NOT FOUND {tx['quantity']}: {tx['text']!r}")
    with open(OUT, "w") as f:
        json.dump({"scipy": __import__("scipy").__version__, "numpy": np.__version__,
                   "checks": records, "texts": texts}, f, indent=1)
        f.write("\n")
    print(f"{len(records)} comparisons and {len(texts)} sentences written to {os.path.relpath(OUT, ROOT)}")
    print()
    print("| quantity | worst LRE |")
    print("| :-- | --: |")
    for q, v in worst.items():
        print(f"| {q} | {v:.1f} |")


if __name__ == "__main__":
    sys.exit(main())
