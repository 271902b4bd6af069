#!/usr/bin/env python3
"""Reference values for covey's linear models on random unbalanced designs.

How to rerun (from the repository root):
    python3 -m pip install numpy scipy && python3 tests/reference/designs.py

All six data sets are INVENTED: drawn from a seeded numpy random generator
(numpy.random.default_rng with fixed seeds), rounded to a few decimals so that
the CSV text holds exactly the numbers used here. The script is deterministic.

For every model the values are computed independently of covey with numpy and
scipy, following /work/scratch/CONVENTIONS.md (the project's model conventions):
  * design matrices are built here, term by term; a factor inside a term gets
    reference (treatment) coding when the term with that factor removed appears
    earlier in the model (the intercept counting as the empty term), otherwise
    full indicator coding ("contained terms" rule);
  * least squares by Householder QR (numpy.linalg.qr) in float64;
  * Type I: sequential in the written order; Type II: RSS(terms not containing T)
    - RSS(same plus T), containment = strict superset of parts; Type III: factors
    in sum-to-zero coding (last level -1), numeric columns raw, SS = RSS(full
    without T's columns) - RSS(full);
  * adjusted means at covariate means (transform applied to the mean), equal
    weights over the other factors' levels; Tukey-Kramer p-values and quantiles
    from scipy.stats.studentized_range; Bonferroni, Sidak, Holm step-down.
Cross-check (done every run, the script stops if it fails): every RSS used for
the Type I/II/III sums of squares is recomputed (a) with projection matrices from
an SVD orthonormal basis, y'(I - UU')y, and (b) in exact rational arithmetic
(python fractions: normal equations solved by Gaussian elimination on the exact
binary values of the data); both must agree with the QR value to a relative
1e-9 (of the total sum of squares).
"""
import csv
import io
import itertools
import json
import math
import os
from fractions import Fraction

import numpy as np
import scipy
from scipy import stats

OUT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "designs")
ALPHA = 0.05
# Relative tolerance for the cross-check of residual sums of squares between QR,
# SVD projections and exact rational arithmetic; float64 QR on these small,
# well-conditioned designs is accurate far beyond this.
CROSS_TOL = 1e-9

SOURCE = "independent computation with numpy %s / scipy %s by tests/reference/designs.py" % (
    np.__version__, scipy.__version__)

# ---------------------------------------------------------------- terms

TRANSFORMS = {
    "identity": (lambda v: v, "{}"),
    "square": (lambda v: v ** 2, "{}^2"),
    "cube": (lambda v: v ** 3, "{}^3"),
    "log": (np.log, "log({})"),
    "sqrt": (np.sqrt, "sqrt({})"),
}


def F(name):
    """A factor part."""
    return ("factor", name)


def N(name, transform="identity"):
    """A numeric part: a column with a transform."""
    return ("num", name, transform)


def part_name(p):
    return p[1] if p[0] == "factor" else TRANSFORMS[p[2]][1].format(p[1])


def term_name(term):
    return " by ".join(part_name(p) for p in term)


def contains(u, t):
    """U contains T when U's parts are a strict superset of T's parts."""
    return set(t) < set(u)


# ---------------------------------------------------------------- coding

def term_columns(term, prior, data, factors, coding):
    """Columns (names, matrix) for one term.

    coding is "reference" or "sum". prior: the terms written before this one,
    as frozensets of parts (the empty set stands for the intercept)."""
    n = len(data["__n__"])
    cols = [([], np.ones(n))]  # list of (name parts, column)
    for p in term:
        new = []
        if p[0] == "factor":
            levels = factors[p[1]]
            values = data[p[1]]
            rest = frozenset(q for q in term if q != p)
            contrast = rest in prior
            if not contrast:
                specs = [(lv, (values == lv).astype(float)) for lv in levels]
            elif coding == "reference":
                specs = [(lv, (values == lv).astype(float)) for lv in levels[1:]]
            else:  # sum-to-zero: level j -> e_j, last level -> -1
                last = (values == levels[-1]).astype(float)
                specs = [(lv, (values == lv).astype(float) - last) for lv in levels[:-1]]
            for names, c in cols:
                for lv, s in specs:
                    new.append((names + ["%s = %s" % (p[1], lv)], c * s))
        else:
            f = TRANSFORMS[p[2]][0]
            v = f(data[p[1]])
            for names, c in cols:
                new.append((names + [part_name(p)], c * v))
        cols = new
    return [" by ".join(nm) for nm, _ in cols], np.column_stack([c for _, c in cols])


def design(terms, data, factors, coding="reference"):
    """Full design matrix with intercept; returns names, X, and per-term column slices."""
    n = len(data["__n__"])
    names = ["intercept"]
    blocks = [np.ones((n, 1))]
    slices = {}
    prior = {frozenset()}
    pos = 1
    for t in terms:
        nm, m = term_columns(t, prior, data, factors, coding)
        names += nm
        blocks.append(m)
        slices[term_name(t)] = list(range(pos, pos + m.shape[1]))
        pos += m.shape[1]
        prior.add(frozenset(t))
    return names, np.hstack(blocks), slices


# ---------------------------------------------------------------- fitting

def qr_fit(X, y):
    q, r = np.linalg.qr(X)
    d = np.abs(np.diag(r))
    if d.min() <= 1e-10 * d.max():
        raise ValueError("design is rank deficient; the reference designs must not be")
    b = np.linalg.solve(r, q.T @ y)
    res = y - X @ b
    rinv = np.linalg.inv(r)
    return b, float(res @ res), rinv @ rinv.T


def rss_svd(X, y):
    u, s, _ = np.linalg.svd(X, full_matrices=False)
    u = u[:, s > 1e-10 * s.max()]
    r = y - u @ (u.T @ y)
    return float(r @ r), u.shape[1]


def rss_exact(X, y):
    """Exact RSS of the least-squares fit in rational arithmetic (normal equations)."""
    Xf = [[Fraction(float(v)) for v in row] for row in X]
    yf = [Fraction(float(v)) for v in y]
    p = len(Xf[0])
    A = [[sum(r[i] * r[j] for r in Xf) for j in range(p)] for i in range(p)]
    c = [sum(r[i] * yy for r, yy in zip(Xf, yf)) for i in range(p)]
    M = [A[i] + [c[i]] for i in range(p)]
    for k in range(p):
        piv = next(i for i in range(k, p) if M[i][k] != 0)
        M[k], M[piv] = M[piv], M[k]
        for i in range(p):
            if i != k and M[i][k] != 0:
                f = M[i][k] / M[k][k]
                M[i] = [a - f * b for a, b in zip(M[i], M[k])]
    b = [M[i][p] / M[i][i] for i in range(p)]
    return float(sum(yy * yy for yy in yf) - sum(bi * ci for bi, ci in zip(b, c)))


CHECKS = {"count": 0, "max_rel_svd": 0.0, "max_rel_exact": 0.0}


def checked_rss(X, y, tss):
    _, rss, _ = qr_fit(X, y)
    r2, _ = rss_svd(X, y)
    r3 = rss_exact(X, y)
    e2 = abs(r2 - rss) / tss
    e3 = abs(r3 - rss) / tss
    CHECKS["count"] += 1
    CHECKS["max_rel_svd"] = max(CHECKS["max_rel_svd"], e2)
    CHECKS["max_rel_exact"] = max(CHECKS["max_rel_exact"], e3)
    if e2 > CROSS_TOL or e3 > CROSS_TOL:
        raise SystemExit("cross-check failed: qr %r svd %r exact %r" % (rss, r2, r3))
    return rss


def reduced_rss(terms, data, factors, y, tss):
    _, X, _ = design(terms, data, factors)
    return checked_rss(X, y, tss), X.shape[1]


# ---------------------------------------------------------------- model

def fit_model(terms, data, factors):
    y = data["y"]
    n = len(y)
    names, X, slices = design(terms, data, factors)
    b, rss, xtxi = qr_fit(X, y)
    p = X.shape[1]
    dfr = n - p
    tss = float(((y - y.mean()) ** 2).sum())
    checked_rss(X, y, tss)
    s2 = rss / dfr
    sigma = math.sqrt(s2)
    V = s2 * xtxi
    r2 = 1 - rss / tss
    adj = 1 - (1 - r2) * (n - 1) / dfr
    fval = ((tss - rss) / (p - 1)) / s2
    logl = -n / 2 * (math.log(2 * math.pi) + math.log(rss / n) + 1)
    k = p + 1
    tq = stats.t.ppf(1 - ALPHA / 2, dfr)

    coefs = []
    for i, nm in enumerate(names):
        se = math.sqrt(V[i, i])
        t = b[i] / se
        coefs.append({"term": nm, "estimate": float(b[i]), "se": se, "t": float(t),
                      "p": float(2 * stats.t.sf(abs(t), dfr))})

    def row(tn, df, ss):
        f = (ss / df) / s2
        return {"term": tn, "df": df, "ss": ss, "f": f, "p": float(stats.f.sf(f, df, dfr))}

    # Type I: sequential
    t1 = []
    prev_rss, prev_p = reduced_rss([], data, factors, y, tss)
    for j, t in enumerate(terms):
        r, q = reduced_rss(terms[: j + 1], data, factors, y, tss)
        t1.append(row(term_name(t), q - prev_p, prev_rss - r))
        prev_rss, prev_p = r, q
    # Type II: contains rule
    t2 = []
    for t in terms:
        base = [u for u in terms if u != t and not contains(u, t)]
        with_t = [u for u in terms if u in base or u == t]
        r0, q0 = reduced_rss(base, data, factors, y, tss)
        r1, q1 = reduced_rss(with_t, data, factors, y, tss)
        t2.append(row(term_name(t), q1 - q0, r0 - r1))
    # Type III: sum-to-zero coding, drop the term's columns from the full model
    t3 = []
    _, Xs, sl3 = design(terms, data, factors, coding="sum")
    rfull = checked_rss(Xs, y, tss)
    assert abs(rfull - rss) <= CROSS_TOL * tss
    for t in terms:
        keep = [c for c in range(Xs.shape[1]) if c not in sl3[term_name(t)]]
        r = checked_rss(Xs[:, keep], y, tss)
        t3.append(row(term_name(t), len(sl3[term_name(t)]), r - rss))

    model = {"terms": [term_name(t) for t in terms], "n": n, "df_residual": dfr, "rss": rss,
             "sigma": sigma, "r_squared": r2, "adj_r_squared": adj, "f": fval,
             "df_model": p - 1, "p": float(stats.f.sf(fval, p - 1, dfr)),
             "aic": -2 * logl + 2 * k, "bic": -2 * logl + math.log(n) * k,
             "coefficients": coefs, "anova": {"1": t1, "2": t2, "3": t3}}

    # adjusted means
    model_factors = [f for f in factors if any(F(f) in t for t in terms)]
    numeric = sorted({p[1] for t in terms for p in t if p[0] == "num"})
    at = {v: float(data[v].mean()) for v in numeric}
    means, pairs = {}, {}
    for f in model_factors:
        others = [g for g in model_factors if g != f]
        Ls = []
        for lv in factors[f]:
            rows = []
            for combo in itertools.product(*[factors[g] for g in others]):
                pt = {"__n__": np.zeros(1)}
                pt[f] = np.array([lv], dtype=object)
                for g, c in zip(others, combo):
                    pt[g] = np.array([c], dtype=object)
                for v in numeric:
                    pt[v] = np.array([at[v]])
                _, xr, _ = design(terms, pt, factors)
                rows.append(xr[0])
            Ls.append(np.mean(rows, axis=0))
        out = []
        for lv, L in zip(factors[f], Ls):
            m = float(L @ b)
            se = math.sqrt(float(L @ V @ L))
            out.append({"level": lv, "mean": m, "se": se, "df": dfr,
                        "lower": m - tq * se, "upper": m + tq * se})
        means[f] = out
        pairs[f] = compare(factors[f], Ls, b, V, dfr)
    model["means"] = means
    model["pairs"] = pairs

    # slopes within levels for factor-by-covariate terms
    slopes = {}
    for t in terms:
        if len(t) == 2 and t[0][0] == "factor" and t[1][0] == "num" and t[1][2] == "identity":
            f, x = t[0][1], t[1][1]
            ix = names.index(x)
            rows = []
            for j, lv in enumerate(factors[f]):
                L = np.zeros(p)
                L[ix] = 1
                if j > 0:
                    L[names.index("%s = %s by %s" % (f, lv, x))] = 1
                s = float(L @ b)
                se = math.sqrt(float(L @ V @ L))
                tt = s / se
                rows.append({"level": lv, "slope": s, "se": se, "t": tt,
                             "p": float(2 * stats.t.sf(abs(tt), dfr)),
                             "lower": s - tq * se, "upper": s + tq * se})
            without = [u for u in terms if u != t]
            r0, q0 = reduced_rss(without, data, factors, y, tss)
            df1 = p - q0
            fv = ((r0 - rss) / df1) / s2
            slopes[f] = {"covariate": x, "rows": rows, "f": fv, "df1": df1, "df2": dfr,
                         "p": float(stats.f.sf(fv, df1, dfr))}
    if slopes:
        model["slopes"] = slopes
    return model


def compare(levels, Ls, b, V, df):
    k = len(levels)
    prs = list(itertools.combinations(range(k), 2))
    m = len(prs)
    base = []
    for i, j in prs:
        d = Ls[i] - Ls[j]
        est = float(d @ b)
        se = math.sqrt(float(d @ V @ d))
        t = est / se
        base.append((levels[i], levels[j], est, se, t, float(2 * stats.t.sf(abs(t), df))))
    qcrit = float(stats.studentized_range.ppf(1 - ALPHA, k, df)) / math.sqrt(2)
    tb = float(stats.t.ppf(1 - ALPHA / (2 * m), df))
    ts = float(stats.t.ppf(1 - (1 - (1 - ALPHA) ** (1 / m)) / 2, df))
    tn = float(stats.t.ppf(1 - ALPHA / 2, df))
    # Holm step-down adjusted p-values, made monotone
    order = sorted(range(m), key=lambda i: base[i][5])
    holm = [0.0] * m
    running = 0.0
    for rank, i in enumerate(order):
        running = max(running, min(1.0, (m - rank) * base[i][5]))
        holm[i] = running

    def rec(r, p, crit):
        a, c, est, se, t, _ = r
        return {"first": a, "second": c, "estimate": est, "se": se, "t": t, "p": p,
                "lower": None if crit is None else est - crit * se,
                "upper": None if crit is None else est + crit * se}

    return {
        "tukey": [rec(r, float(stats.studentized_range.sf(abs(r[4]) * math.sqrt(2), k, df)), qcrit)
                  for r in base],
        "holm": [rec(r, holm[i], None) for i, r in enumerate(base)],
        "bonferroni": [rec(r, min(1.0, m * r[5]), tb) for r in base],
        "sidak": [rec(r, 1 - (1 - r[5]) ** m, ts) for r in base],
        "none": [rec(r, r[5], tn) for r in base],
    }


# ---------------------------------------------------------------- data sets (invented)

def fmt(v, nd):
    return repr(round(float(v), nd))


def make_d1():
    rng = np.random.default_rng(101)
    sizes = {("a1", "b1"): 9, ("a1", "b2"): 4, ("a2", "b1"): 3, ("a2", "b2"): 8,
             ("a3", "b1"): 6, ("a3", "b2"): 10}
    eff_a = {"a1": 0.0, "a2": 1.5, "a3": -1.0}
    eff_b = {"b1": 0.0, "b2": 0.8}
    rows = []
    for (a, b), m in sizes.items():
        for _ in range(m):
            x = rng.uniform(10, 30)
            y = 5 + eff_a[a] + eff_b[b] + (0.7 if (a, b) == ("a2", "b2") else 0) + 0.3 * x + rng.normal(0, 1.2)
            rows.append([a, b, fmt(x, 2), fmt(y, 3)])
    rng.shuffle(rows)
    return (["a", "b", "x", "y"], rows, {"a": ["a1", "a2", "a3"], "b": ["b1", "b2"]},
            [[[F("a")], [F("b")], [F("a"), F("b")], [N("x")]]])


def make_d2():
    rng = np.random.default_rng(202)
    sizes = {"G1": 7, "G2": 11, "G3": 5, "G4": 9}
    inter = {"G1": 2.0, "G2": 3.1, "G3": 1.2, "G4": 2.6}
    slope = {"G1": 0.5, "G2": 0.8, "G3": 0.35, "G4": 0.55}
    rows = []
    for g, m in sizes.items():
        for _ in range(m):
            x = rng.uniform(0, 20)
            rows.append([g, fmt(x, 2), fmt(inter[g] + slope[g] * x + rng.normal(0, 1.0), 3)])
    rng.shuffle(rows)
    return (["g", "x", "y"], rows, {"g": ["G1", "G2", "G3", "G4"]},
            [[[F("g")], [N("x")]], [[F("g")], [N("x")], [F("g"), N("x")]]])


def make_d3():
    rng = np.random.default_rng(303)
    sizes = {("p", "u"): 2, ("p", "v"): 12, ("p", "w"): 3,
             ("q", "u"): 9, ("q", "v"): 2, ("q", "w"): 6}
    ea = {"p": 0.0, "q": -2.0}
    eb = {"u": 0.0, "v": 1.0, "w": 2.5}
    rows = []
    for (a, b), m in sizes.items():
        for _ in range(m):
            x = rng.normal(50, 8)
            z = rng.uniform(1, 5)
            y = 20 + ea[a] + eb[b] + (1.5 if (a, b) == ("q", "w") else 0) + 0.12 * x - 0.9 * z + rng.normal(0, 1.5)
            rows.append([a, b, fmt(x, 1), fmt(z, 2), fmt(y, 2)])
    rng.shuffle(rows)
    return (["a", "b", "x", "z", "y"], rows, {"a": ["p", "q"], "b": ["u", "v", "w"]},
            [[[F("a")], [F("b")], [N("x")], [N("z")], [F("a"), F("b")]]])


def make_d4():
    rng = np.random.default_rng(404)
    rows = []
    for _ in range(30):
        x = rng.uniform(0.5, 12)
        x = round(x, 2)
        y = 1 + 0.5 * x - 0.03 * x ** 2 + 2 * math.log(x) + rng.normal(0, 0.4)
        rows.append([fmt(x, 2), fmt(y, 3)])
    return (["x", "y"], rows, {}, [[[N("x")], [N("x", "square")], [N("x", "log")]]])


def make_d5():
    rng = np.random.default_rng(505)
    # declared order low, medium, high; alphabetical order would be high, low, medium
    sizes = {"low": 8, "medium": 6, "high": 9}
    eff = {"low": 0.0, "medium": 1.2, "high": 2.9}
    rows = []
    for g, m in sizes.items():
        for _ in range(m):
            x = rng.uniform(5, 15)
            rows.append([g, fmt(x, 2), fmt(10 + eff[g] + 0.4 * x + rng.normal(0, 0.8), 3)])
    rng.shuffle(rows)
    for i in (3, 11, 17):
        rows[i][2] = ""  # missing y
    rows[7][1] = ""  # missing x
    return (["g", "x", "y"], rows, {"g": ["low", "medium", "high"]}, [[[F("g")], [N("x")]]])


def make_d6():
    rng = np.random.default_rng(606)
    sizes = {"k1": 8, "k2": 6, "k3": 10}
    inter = {"k1": 4.0, "k2": 6.0, "k3": 3.0}
    slope = {"k1": 0.4, "k2": 0.25, "k3": 0.6}
    rows = []
    for g, m in sizes.items():
        for _ in range(m):
            x = rng.uniform(2, 12)  # x = 0 lies outside the data: Type III refers to x = 0
            rows.append([g, fmt(x, 2), fmt(inter[g] + slope[g] * x + rng.normal(0, 0.7), 3)])
    rng.shuffle(rows)
    return (["a", "x", "y"], rows, {"a": ["k1", "k2", "k3"]},
            [[[F("a")], [N("x")], [F("a"), N("x")]]])


def load(header, rows, factors):
    """Parse the CSV text's rows as the engine would; drop rows with a missing value."""
    cols = {h: [r[i] for r in rows] for i, h in enumerate(header)}
    keep = [i for i in range(len(rows)) if all(cols[h][i] != "" for h in header)]
    data = {}
    for h in header:
        vals = [cols[h][i] for i in keep]
        data[h] = np.array(vals, dtype=object) if h in factors else np.array([float(v) for v in vals])
    data["__n__"] = np.zeros(len(keep))
    return data


def main():
    os.makedirs(OUT, exist_ok=True)
    makers = {"d1": make_d1, "d2": make_d2, "d3": make_d3, "d4": make_d4, "d5": make_d5, "d6": make_d6}
    for name, mk in makers.items():
        header, rows, factors, models = mk()
        buf = io.StringIO()
        w = csv.writer(buf, lineterminator="\n")
        w.writerow(header)
        w.writerows(rows)
        with open(os.path.join(OUT, name + ".csv"), "w") as f:
            f.write(buf.getvalue())
        data = load(header, rows, factors)
        doc = {"source": SOURCE,
               "note": "invented data, seeded random generator",
               "factors": factors,
               "models": [fit_model(m, data, factors) for m in models]}
        if name == "d5":
            doc["levels"] = factors["g"]
        with open(os.path.join(OUT, name + ".json"), "w") as f:
            json.dump(doc, f, indent=1)
            f.write("\n")
    print("cross-check: %d residual sums of squares, max relative difference (of TSS): "
          "SVD projection %.3g, exact rational %.3g" % (
              CHECKS["count"], CHECKS["max_rel_svd"], CHECKS["max_rel_exact"]))


if __name__ == "__main__":
    main()
