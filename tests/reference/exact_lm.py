#!/usr/bin/env python3
"""Exact rational least squares for covey's reference cases (standard library `fractions`).

Every number here is computed without rounding from the data as covey reads them (the
data are written as decimals that doubles hold exactly), then rounded once to a double
for the committed JSON. p-values come from scipy.stats applied to the exact statistic.

A model is a dict: {"intercept": bool, "terms": [[(var, power), ...], ...]} with factor
parts written (var, 1). Design columns follow covey's coding rule ("contained terms",
Chambers & Hastie 1992, section 2.4.1, as src/model/design.rs states it): a factor in a
term is coded by contrasts when the rest of the term is an earlier term (for a main
effect: when the model has an intercept or an earlier factor main effect), else by
indicators of every level; contrasts are treatment (levels but the first) or, for Type
III, sum-to-zero (level j minus the last).
"""
from fractions import Fraction as Q
import math

from scipy import stats


class Data:
    """Columns by name: numeric ones as lists of Fractions, factors as lists of labels
    with their levels in declared order."""

    def __init__(self, numeric, factors, levels):
        self.numeric = numeric
        self.factors = factors
        self.levels = levels
        self.n = len(next(iter(numeric.values())))

    def is_factor(self, v):
        return v in self.factors

    def present(self, v):
        seen = set(self.factors[v])
        return [l for l in self.levels[v] if l in seen]


def keys(term):
    return sorted((v, p) for v, p in term)


def contrast_coded(data, model, t, var):
    terms = model["terms"]
    rest = [k for k in keys(terms[t]) if k[0] != var]
    if not rest:
        earlier_factor_main = any(
            len(terms[u]) == 1 and data.is_factor(terms[u][0][0]) for u in range(t)
        )
        return model["intercept"] or earlier_factor_main
    return any(keys(terms[u]) == rest for u in range(t))


def columns(data, model, scheme):
    """Design columns as functions: list of (term index or None, name, parts) where each
    part is ("num", var, power) | ("ind", var, level) | ("eff", var, level, last)."""
    cols = []
    if model["intercept"]:
        cols.append((None, "(intercept)", []))
    for t, term in enumerate(model["terms"]):
        choices = []
        for v, p in term:
            if not data.is_factor(v):
                choices.append([(("num", v, p), v if p == 1 else "%s^%d" % (v, p))])
                continue
            pres = data.present(v)
            if contrast_coded(data, model, t, v):
                if scheme == "treatment":
                    alts = [(("ind", v, l), "%s = %s" % (v, l)) for l in pres[1:]]
                else:
                    alts = [(("eff", v, l, pres[-1]), "%s = %s" % (v, l)) for l in pres[:-1]]
            else:
                alts = [(("ind", v, l), "%s = %s" % (v, l)) for l in pres]
            choices.append(alts)
        combos = [[]]
        for ch in choices:
            combos = [c + [a] for c in combos for a in ch]
        for c in combos:
            cols.append((t, " by ".join(a[1] for a in c), [a[0] for a in c]))
    return cols


def part_value(part, row, data, point=None):
    kind = part[0]
    if kind == "num":
        x = point["numeric"][part[1]] if point else data.numeric[part[1]][row]
        return x ** part[2]
    if point:
        w = point["weights"][part[1]]
        if kind == "ind":
            return w.get(part[2], Q(0))
        return w.get(part[2], Q(0)) - w.get(part[3], Q(0))
    lab = data.factors[part[1]][row]
    if kind == "ind":
        return Q(1) if lab == part[2] else Q(0)
    return Q(1) if lab == part[2] else (Q(-1) if lab == part[3] else Q(0))


def matrix(data, cols):
    out = []
    for i in range(data.n):
        row = []
        for _, _, parts in cols:
            v = Q(1)
            for p in parts:
                v *= part_value(p, i, data)
            row.append(v)
        out.append(row)
    return out


def solve(a, b):
    """Solve a x = b exactly for a square non-singular a (Gauss-Jordan)."""
    n = len(a)
    m = [row[:] + [bb] for row, bb in zip(a, b)]
    for c in range(n):
        piv = next(r for r in range(c, n) if m[r][c] != 0)
        m[c], m[piv] = m[piv], m[c]
        pv = m[c][c]
        m[c] = [x / pv for x in m[c]]
        for r in range(n):
            if r != c and m[r][c] != 0:
                f = m[r][c]
                m[r] = [x - f * y for x, y in zip(m[r], m[c])]
    return [m[r][n] for r in range(n)]


def independent(x, sel):
    """The columns of sel (in order) that are not combinations of the ones kept before
    them, by exact elimination on the rows."""
    kept = []
    basis = []  # reduced rows of kept columns as vectors over rows, with pivot index
    for j in sel:
        v = [row[j] for row in x]
        for piv, b in basis:
            if v[piv] != 0:
                f = v[piv] / b[piv]
                v = [a - f * c for a, c in zip(v, b)]
        nz = next((i for i, a in enumerate(v) if a != 0), None)
        if nz is not None:
            basis.append((nz, v))
            kept.append(j)
    return kept


def fit(x, y, sel):
    """(kept columns, coefficients, (X'X)^-1, RSS) of y on the columns sel, exactly."""
    kept = independent(x, sel)
    g = [[sum(row[a] * row[b] for row in x) for b in kept] for a in kept]
    xy = [sum(row[a] * yy for row, yy in zip(x, y)) for a in kept]
    b = solve(g, xy) if kept else []
    fitted = [sum(row[k] * bk for k, bk in zip(kept, b)) for row in x]
    rss = sum((yy - f) ** 2 for yy, f in zip(y, fitted))
    return kept, b, g, rss


def inverse(g):
    n = len(g)
    cols = [solve(g, [Q(1) if i == j else Q(0) for i in range(n)]) for j in range(n)]
    return [[cols[j][i] for j in range(n)] for i in range(n)]


def term_cols(cols, t):
    return [j for j, c in enumerate(cols) if c[0] == t]


def contains(model, u, t):
    ku, kt = keys(model["terms"][u]), keys(model["terms"][t])
    return len(ku) > len(kt) and all(k in ku for k in kt)


def f_row(df, ss, df_res, rss):
    if df == 0:
        return {"df": 0, "ss": 0.0, "f": None, "p": None}
    f = (ss / df) / (rss / df_res)
    return {"df": df, "ss": float(ss), "f": float(f), "p": float(stats.f.sf(float(f), df, df_res))}


def analyse(data, model, y, means=None, level_of=None):
    """Everything covey's tables report for this model, exactly: the fit, Type I, II and
    III sums of squares, coefficients (treatment coding), and, for `means` = (factor,
    covariate values), adjusted means and pairwise differences."""
    tcols = columns(data, model, "treatment")
    x = matrix(data, tcols)
    alls = list(range(len(tcols)))
    kept, b, g, rss = fit(x, y, alls)
    n = data.n
    df_res = n - len(kept)
    base = [0] if model["intercept"] else []
    _, _, _, tss = fit(x, y, base)
    out = {"n": n, "df_residual": df_res, "rss": float(rss), "tss": float(tss),
           "sigma": math.sqrt(rss / df_res) if rss else 0.0}
    nterms = len(model["terms"])
    names = [" by ".join(v if data.is_factor(v) or p == 1 else "%s^%d" % (v, p)
                         for v, p in term) for term in model["terms"]]
    # Type I
    rows = []
    prev_sel = list(base)
    prev_rank, prev_rss = len(independent(x, prev_sel)), fit(x, y, prev_sel)[3]
    for t in range(nterms):
        sel = prev_sel + term_cols(tcols, t)
        r = fit(x, y, sel)
        rank = len(r[0])
        rows.append(dict(term=names[t], **f_row(rank - prev_rank, prev_rss - r[3], df_res, rss)))
        prev_sel, prev_rank, prev_rss = sel, rank, r[3]
    out["type1"] = rows
    # Type II
    rows = []
    for t in range(nterms):
        sel = list(base)
        for u in range(nterms):
            if u != t and not contains(model, u, t):
                sel += term_cols(tcols, u)
        k0, _, _, r0 = fit(x, y, sel)
        k1, _, _, r1 = fit(x, y, sel + term_cols(tcols, t))
        rows.append(dict(term=names[t], **f_row(len(k1) - len(k0), r0 - r1, df_res, rss)))
    out["type2"] = rows
    # Type III (full-rank designs only)
    ecols = columns(data, model, "effect")
    ex = matrix(data, ecols)
    ek, _, _, erss = fit(ex, y, list(range(len(ecols))))
    if len(ek) == len(ecols):
        rows = []
        for t in range(nterms):
            mine = term_cols(ecols, t)
            sel = [j for j in range(len(ecols)) if j not in mine]
            k0, _, _, r0 = fit(ex, y, sel)
            rows.append(dict(term=names[t], **f_row(len(ek) - len(k0), r0 - erss, df_res, rss)))
        out["type3"] = rows
    # Coefficients of the model as written.
    if len(kept) == len(tcols):
        ginv = inverse(g)
        s2 = rss / df_res
        coefs = []
        for i, j in enumerate(kept):
            se2 = s2 * ginv[i][i]
            coefs.append({"term": tcols[j][1], "estimate": float(b[i]),
                          "se": math.sqrt(se2) if se2 else 0.0})
        out["coefficients"] = coefs
        if means:
            out["means"], out["pairs"] = adjusted(data, model, tcols, b, ginv, s2, df_res, means)
    return out


def adjusted(data, model, tcols, b, ginv, s2, df_res, means):
    factor, at = means
    used_factors = sorted({v for term in model["terms"] for v, _ in term if data.is_factor(v)})
    rows = []
    for lev in data.present(factor):
        weights = {}
        for f in used_factors:
            pres = data.present(f)
            if f == factor:
                weights[f] = {lev: Q(1)}
            else:
                weights[f] = {l: Q(1, len(pres)) for l in pres}
        point = {"weights": weights, "numeric": at}
        l = []
        for _, _, parts in tcols:
            v = Q(1)
            for p in parts:
                v *= part_value(p, None, data, point)
            l.append(v)
        rows.append((lev, l))

    def est_se(l):
        est = sum(a * c for a, c in zip(l, b))
        var = s2 * sum(l[i] * ginv[i][j] * l[j] for i in range(len(l)) for j in range(len(l)))
        return est, var

    out_means = []
    for lev, l in rows:
        est, var = est_se(l)
        out_means.append({"level": lev, "mean": float(est), "se": math.sqrt(var)})
    out_pairs = []
    for i in range(len(rows)):
        for j in range(i + 1, len(rows)):
            d = [a - c for a, c in zip(rows[i][1], rows[j][1])]
            est, var = est_se(d)
            se = math.sqrt(var)
            t = float(est) / se
            out_pairs.append({"first": rows[i][0], "second": rows[j][0],
                              "estimate": float(est), "se": se, "t": t,
                              "p": float(2 * stats.t.sf(abs(t), df_res))})
    return out_means, out_pairs


def decimal_text(q):
    """The exact decimal text of a Fraction that a double holds exactly (so that covey,
    reading the text, gets this very number)."""
    q = Q(q)
    assert Q(float(q)) == q, "%s is not a double" % q
    sign = "-" if q < 0 else ""
    q = abs(q)
    digits = 0
    while (q * 10 ** digits).denominator != 1:
        digits += 1
    s = str(int(q * 10 ** digits)).rjust(digits + 1, "0")
    if digits:
        s = s[:-digits] + "." + s[-digits:]
    return sign + s


def term_text(term):
    return " by ".join(v if p == 1 else "%s^%d" % (v, p) for v, p in term)


def case(name, data, model, y, means=None, extra=None):
    """A reference case: the CSV text, the covey statements and the exact results keyed
    by the statement that prints them."""
    names = list(data.numeric) + list(data.factors)
    lines = [",".join(names + ["y"])]
    for i in range(data.n):
        cells = [decimal_text(data.numeric[v][i]) for v in data.numeric]
        cells += [data.factors[v][i] for v in data.factors]
        lines.append(",".join(cells + [decimal_text(y[i])]))
    csv = "\n".join(lines) + "\n"
    st = ['load "data.csv"']
    for v in data.factors:
        st.append("factor %s levels %s" % (v, ", ".join(data.levels[v])))
    terms = " + ".join(term_text(t) for t in model["terms"])
    st.append("model m: y on %s%s" % (terms, "" if model["intercept"] else " without intercept"))
    res = analyse(data, model, y, means)
    expected = {}
    st.append("table fit m")
    expected["table fit m"] = {"sigma": res["sigma"], "rss": res["rss"], "df_residual": res["df_residual"]}
    for k, key in (("1", "type1"), ("2", "type2"), ("3", "type3")):
        if key in res:
            s_ = "table anova m type %s" % k
            st.append(s_)
            expected[s_] = res[key]
    if "coefficients" in res:
        st.append("table coefficients m")
        expected["table coefficients m"] = res["coefficients"]
    if means and "means" in res:
        factor, at = means
        at_text = ", ".join("%s = %s" % (v, decimal_text(x)) for v, x in at.items())
        s_ = "table means m for %s at %s" % (factor, at_text)
        st.append(s_)
        expected[s_] = res["means"]
        s_ = "table differences m for %s at %s correction none" % (factor, at_text)
        st.append(s_)
        expected[s_] = res["pairs"]
    out = {"name": name, "csv": csv, "statements": st, "expected": expected}
    if extra:
        out.update(extra)
    return out
