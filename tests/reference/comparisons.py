#!/usr/bin/env python3
"""Reference values for comparisons with a control (Dunnett), robust (HC3) inference and
weighted least squares: tests/comparisons.rs reads what this script writes.

How to rerun (from the repository root):
    python3 -m venv /tmp/ref && /tmp/ref/bin/pip install numpy scipy
    /tmp/ref/bin/python tests/reference/comparisons.py

All data sets are INVENTED: drawn from numpy.random.default_rng with fixed seeds and
rounded, so that the CSV text holds exactly the numbers used here. Nothing was measured.
Everything is computed here with numpy, scipy and Python's fractions, sharing no code with
covey:

  * Dunnett, one-way data: scipy.stats.dunnett (p and confidence limits); and, since the
    correlations of the comparisons of a one-way design have the product form
    rho_ij = l_i l_j, the exact probability as a two-dimensional integral (scipy.integrate)
    over the chi variable and one normal variable (Dunnett 1955, JASA 50, section 2),
    with the critical value by root finding on it;
  * Dunnett, analysis of covariance: the t statistics and their correlation matrix from a
    numpy least-squares fit, and the probabilities from scipy.stats.multivariate_t.cdf with
    many points (its own randomised quasi-Monte Carlo rule);
  * published critical values of Dunnett's table (Dunnett 1955, Tables 1a and 1b; values
    FROM MEMORY, two decimals), each checked here against the exact integral;
  * HC3: the sandwich (X'X)^-1 X' diag(e^2 / (1 - h)^2) X (X'X)^-1 in numpy; Wald tests of
    the Type II and Type III hypotheses written as L b = 0 with
    L = X_T' (I - P_0) X (Type II) or the sum-to-zero coefficients of the term (Type III);
  * weighted least squares in numpy (rows times sqrt(w));
  * for a covariate near 10^6, HC3 standard errors and weighted least squares also in exact
    rational arithmetic (fractions), on the exact binary values of the data.
"""
import csv
import json
import math
import os
from fractions import Fraction

import numpy as np
import scipy
from scipy import integrate, optimize, stats

HERE = os.path.dirname(os.path.abspath(__file__))
OUT = os.path.join(HERE, "comparisons")
SOURCE = "tests/reference/comparisons.py with numpy %s, scipy %s" % (np.__version__, scipy.__version__)


def write_csv(name, header, rows):
    with open(os.path.join(OUT, name), "w", newline="") as f:
        w = csv.writer(f, lineterminator="\n")
        w.writerow(header)
        for r in rows:
            w.writerow(r)


def read_back(name):
    with open(os.path.join(OUT, name)) as f:
        return list(csv.DictReader(f))


# ---------------------------------------------------------------- Dunnett, exact one-way


def product_form_cdf(c, lam, df, two_sided, nodes=600):
    """P(max_i T_i < c) (or max |T_i|) for correlations l_i l_j and df degrees of freedom:
    E over S = sqrt(chi2_df / df) and Z ~ N(0, 1) of prod_i P(-c S < l_i Z + sqrt(1 - l_i^2)
    Z_i < c S), by Gauss-Legendre quadrature in s and z (the integrand is smooth; the
    script cross-checks it against adaptive quadrature, see check_quadrature)."""
    lam = np.asarray(lam, dtype=float)[None, None, :]
    root = np.sqrt(1.0 - lam ** 2)
    x, w = np.polynomial.legendre.leggauss(nodes)
    z = 10.0 * x
    wz = 10.0 * w * stats.norm.pdf(z)
    if math.isinf(df):
        s = np.array([1.0])
        ws = np.array([1.0])
    else:
        lo = math.sqrt(stats.chi2.ppf(1e-16, df) / df)
        hi = math.sqrt(stats.chi2.isf(1e-16, df) / df)
        s = lo + (hi - lo) * (x + 1) / 2
        ws = (hi - lo) / 2 * w * 2 * s * df * stats.chi2.pdf(s * s * df, df)
    S = s[:, None, None]
    Z = z[None, :, None]
    hi_ = stats.norm.cdf((c * S + lam * Z) / root)
    lo_ = stats.norm.cdf((-c * S + lam * Z) / root) if two_sided else 0.0
    inner = np.prod(hi_ - lo_, axis=2)
    return float(ws @ inner @ wz)


def check_quadrature():
    """The Gauss-Legendre sums against scipy's adaptive quadrature at one point."""
    lam = [math.sqrt(0.5), 0.6, 0.8]
    c, df = 2.4, 12
    root = [math.sqrt(1 - l * l) for l in lam]

    def inner(sv):
        f = lambda z: stats.norm.pdf(z) * np.prod(
            [stats.norm.cdf((c * sv + l * z) / r) - stats.norm.cdf((-c * sv + l * z) / r) for l, r in zip(lam, root)])
        return integrate.quad(f, -10, 10, epsabs=1e-13, limit=200)[0]

    dens = lambda sv: 2 * sv * df * stats.chi2.pdf(sv * sv * df, df)
    ref = integrate.quad(lambda sv: dens(sv) * inner(sv), 0, 4, epsabs=1e-12, limit=200)[0]
    got = product_form_cdf(c, lam, df, True)
    if abs(got - ref) > 1e-10:
        raise SystemExit("quadrature check failed: %r vs %r" % (got, ref))


def product_form_quantile(level, lam, df, two_sided):
    return optimize.brentq(lambda c: product_form_cdf(c, lam, df, two_sided) - level, 0.5, 8.0, xtol=1e-12)


def oneway():
    rng = np.random.default_rng(20261204)
    sizes = {"ctrl": 6, "t1": 8, "t2": 5, "t3": 7}
    shift = {"ctrl": 0.0, "t1": 1.0, "t2": 2.6, "t3": -0.4}
    rows = []
    for g, n in sizes.items():
        for _ in range(n):
            rows.append([g, round(20.0 + shift[g] + rng.normal(0, 1.5), 2)])
    write_csv("oneway.csv", ["group", "y"], rows)
    data = read_back("oneway.csv")
    samples = {g: np.array([float(r["y"]) for r in data if r["group"] == g]) for g in sizes}
    treat = ["t1", "t2", "t3"]
    out = {"source": SOURCE, "groups": list(sizes)}
    for alternative, side in (("two-sided", "both"), ("greater", "above")):
        res = stats.dunnett(*[samples[g] for g in treat], control=samples["ctrl"],
                            alternative=alternative, random_state=np.random.default_rng(1))
        ci = res.confidence_interval(0.95)
        # Exact, from the product form.
        n0 = len(samples["ctrl"])
        ns = [len(samples[g]) for g in treat]
        lam = [math.sqrt(n / (n + n0)) for n in ns]
        df = sum(len(v) for v in samples.values()) - len(samples)
        pooled = sum(((v - v.mean()) ** 2).sum() for v in samples.values()) / df
        diffs = [samples[g].mean() - samples["ctrl"].mean() for g in treat]
        ses = [math.sqrt(pooled * (1 / n + 1 / n0)) for n in ns]
        ts = [d / s for d, s in zip(diffs, ses)]
        two = side == "both"
        exact_p = [1 - product_form_cdf(abs(t) if two else t, lam, df, two) for t in ts]
        crit = product_form_quantile(0.95, lam, df, two)
        out[side] = {
            "scipy_p": [float(p) for p in res.pvalue],
            "scipy_lower": [float(v) for v in ci.low],
            "scipy_upper": [float(v) if math.isfinite(v) else None for v in ci.high],
            "exact_p": exact_p,
            "exact_critical": crit,
            "estimate": diffs,
            "se": ses,
            "t": ts,
        }
    return out


# ---------------------------------------------------------------- Dunnett, ANCOVA


def ancova():
    rng = np.random.default_rng(7)
    sizes = {"ctrl": 7, "a": 5, "b": 9, "c": 6}
    shift = {"ctrl": 0.0, "a": 1.2, "b": 2.0, "c": 0.3}
    rows = []
    for g, n in sizes.items():
        for _ in range(n):
            x = round(rng.normal(50, 8) + (3 if g == "b" else 0), 1)
            rows.append([g, x, round(10 + 0.3 * (x - 50) + shift[g] + rng.normal(0, 1.2), 2)])
    write_csv("ancova.csv", ["group", "x", "y"], rows)
    data = read_back("ancova.csv")
    groups = list(sizes)
    g = [r["group"] for r in data]
    x = np.array([float(r["x"]) for r in data])
    y = np.array([float(r["y"]) for r in data])
    X = np.column_stack([np.ones(len(y))] + [[1.0 if gi == lev else 0.0 for gi in g] for lev in groups[1:]] + [x])
    b, *_ = np.linalg.lstsq(X, y, rcond=None)
    e = y - X @ b
    df = len(y) - X.shape[1]
    s2 = e @ e / df
    xtx_inv = np.linalg.inv(X.T @ X)
    # Differences of adjusted means from the control = the group coefficients.
    idx = [1, 2, 3]
    est = b[idx]
    cov = s2 * xtx_inv[np.ix_(idx, idx)]
    se = np.sqrt(np.diag(cov))
    t = est / se
    corr = cov / np.outer(se, se)
    out = {"source": SOURCE, "groups": groups, "estimate": est.tolist(), "se": se.tolist(),
           "t": t.tolist(), "df": df, "corr": corr.tolist()}
    mvt = stats.multivariate_t(shape=corr, df=df)
    def cdf(c, two):
        return mvt.cdf(np.full(3, c), lower_limit=np.full(3, -c) if two else None,
                       maxpts=2_000_000, random_state=np.random.default_rng(11))
    out["p_both"] = [float(1 - cdf(abs(v), True)) for v in t]
    out["p_above"] = [float(1 - cdf(v, False)) for v in t]
    out["critical_both"] = optimize.brentq(lambda c: cdf(c, True) - 0.95, 2.0, 3.2, xtol=1e-6)
    return out


# ---------------------------------------------------------------- published table


# Dunnett (1955), Table 1b (two-sided) and 1a (one-sided), alpha = 0.05, equal group
# sizes (correlation 1/2), by df and number of treatments k: FROM MEMORY, two decimals.
TABLE_TWO_SIDED = {10: [2.57, 2.76, 2.89, 2.99], 20: [2.38, 2.54, 2.65, 2.73],
                   30: [2.32, 2.47, 2.58, 2.66], math.inf: [2.21, 2.35, 2.44, 2.51]}
TABLE_ONE_SIDED = {10: [2.15, 2.34, 2.47, 2.56], 20: [2.03, 2.19, 2.30, 2.39],
                   math.inf: [1.92, 2.06, 2.16, 2.23]}


def table():
    out = []
    for two, tab in ((True, TABLE_TWO_SIDED), (False, TABLE_ONE_SIDED)):
        for df, values in tab.items():
            for k, v in zip(range(2, 6), values):
                exact = product_form_quantile(0.95, [math.sqrt(0.5)] * k, df, two)
                if abs(exact - v) > 0.006:
                    raise SystemExit("memory value %s (df %s, k %s, two-sided %s) is off: %s" % (v, df, k, two, exact))
                out.append({"two_sided": two, "df": None if math.isinf(df) else df, "k": k,
                            "table": v, "exact": exact})
    return out


# ---------------------------------------------------------------- HC3 and weighted fits


def design(seed, n_per, offset=0.0, weighted=False):
    rng = np.random.default_rng(seed)
    rows = []
    gs, hs = ["g1", "g2", "g3"], ["h1", "h2"]
    for gi, gl in enumerate(gs):
        for hi_, hl in enumerate(hs):
            for _ in range(int(n_per[gi * 2 + hi_])):
                x = round(rng.normal(10, 2), 2)
                sd = 0.5 + 1.5 * gi  # unequal spread between the levels of g
                y = round(3 + gi * 1.1 - hi_ * 0.7 + 0.4 * gi * hi_ + 0.8 * x + rng.normal(0, sd), 3)
                w = int(rng.integers(1, 6)) if weighted else 1
                rows.append([gl, hl, "%.2f" % (offset + x) if offset else x, y, w])
    return rows


def columns(data, effect=False):
    """Columns of y on g + h + g by h + x (treatment or sum-to-zero coding)."""
    gs, hs = ["g1", "g2", "g3"], ["h1", "h2"]
    n = len(data)
    def code(v, levels, lev):
        if effect:
            return 1.0 if v == lev else (-1.0 if v == levels[-1] else 0.0)
        return 1.0 if v == lev else 0.0
    gl = gs[:-1] if effect else gs[1:]
    hl = hs[:-1] if effect else hs[1:]
    G = np.array([[code(r["g"], gs, l) for l in gl] for r in data])
    H = np.array([[code(r["h"], hs, l) for l in hl] for r in data])
    GH = np.array([[a * b for a in gg for b in hh] for gg, hh in zip(G, H)])
    x = np.array([[float(r["x"])] for r in data])
    cols = {"intercept": np.ones((n, 1)), "g": G, "h": H, "g by h": GH, "x": x}
    return cols


def hc3_design(name, seed, n_per, offset=0.0):
    write_csv(name + ".csv", ["g", "h", "x", "y", "w"], design(seed, n_per, offset))
    data = read_back(name + ".csv")
    y = np.array([float(r["y"]) for r in data])
    cols = columns(data)
    order = ["intercept", "g", "h", "g by h", "x"]
    X = np.hstack([cols[t] for t in order])
    b, *_ = np.linalg.lstsq(X, y, rcond=None)
    e = y - X @ b
    xtx_inv = np.linalg.inv(X.T @ X)
    h = np.einsum("ij,jk,ik->i", X, xtx_inv, X)
    meat = (X * (e ** 2 / (1 - h) ** 2)[:, None]).T @ X
    V = xtx_inv @ meat @ xtx_inv
    df = len(y) - X.shape[1]
    if offset:
        # Near 10^6, numpy's normal-equation sandwich has lost its digits: only the exact
        # standard errors are kept.
        return {"source": SOURCE, "df": df, "exact_coef_se": exact_hc3(X, y)}
    se = np.sqrt(np.diag(V))
    # Adjusted means of g: h averaged with equal weights, x at its mean.
    xm = np.mean([float(r["x"]) for r in data])
    means = []
    for gi in range(3):
        row = np.zeros(X.shape[1])
        row[0] = 1
        if gi > 0:
            row[gi] = 1  # g columns at 1..2
        row[3] = 0.5  # h2 with weight 1/2
        if gi > 0:
            row[4 + gi - 1] = 0.5  # g by h
        row[6] = xm
        means.append([float(row @ b), float(math.sqrt(row @ V @ row))])
    # Wald tests of Type II and Type III hypotheses.
    def wald(L):
        Lb = L @ b
        return float(Lb @ np.linalg.solve(L @ V @ L.T, Lb) / L.shape[0])
    spans = {"g": [1, 2], "h": [3], "g by h": [4, 5], "x": [6]}
    contains = {"g": ["g by h"], "h": ["g by h"], "g by h": [], "x": []}
    type2 = {}
    for t in ["g", "h", "g by h", "x"]:
        base = [0] + [c for u in spans if u != t and u not in contains[t] for c in spans[u]]
        X0 = X[:, base]
        P0 = X0 @ np.linalg.pinv(X0)
        XT = X[:, spans[t]]
        L = XT.T @ (np.eye(len(y)) - P0) @ X
        type2[t] = wald(L)
    # Type III: the same model in sum-to-zero coding; its HC3 covariance.
    ecols = columns(data, effect=True)
    XE = np.hstack([ecols[t] for t in order])
    be, *_ = np.linalg.lstsq(XE, y, rcond=None)
    xe_inv = np.linalg.inv(XE.T @ XE)
    VE = xe_inv @ ((XE * (e ** 2 / (1 - h) ** 2)[:, None]).T @ XE) @ xe_inv
    type3 = {}
    for t in ["g", "h", "g by h", "x"]:
        idx = spans[t]
        type3[t] = float(be[idx] @ np.linalg.solve(VE[np.ix_(idx, idx)], be[idx]) / len(idx))
    return {"source": SOURCE, "df": df, "coef_se": se.tolist(), "means": means,
            "type2_f": type2, "type3_f": type3}


def fr_solve(A, B):
    """Solve A X = B exactly (Gauss-Jordan on fractions); B a list of columns."""
    n = len(A)
    M = [list(A[i]) + [B[j][i] for j in range(len(B))] for i in range(n)]
    for c in range(n):
        p = next(r for r in range(c, n) if M[r][c] != 0)
        M[c], M[p] = M[p], M[c]
        pv = M[c][c]
        M[c] = [v / pv for v in M[c]]
        for r in range(n):
            if r != c and M[r][c] != 0:
                f = M[r][c]
                M[r] = [a - f * b for a, b in zip(M[r], M[c])]
    return [[M[i][n + j] for i in range(n)] for j in range(len(B))]


def exact_hc3(X, y, w=None):
    Xf = [[Fraction(float(v)) for v in row] for row in X]
    yf = [Fraction(float(v)) for v in y]
    wf = [Fraction(1)] * len(yf) if w is None else [Fraction(int(v)) for v in w]
    p = len(Xf[0])
    xtx = [[sum(wf[i] * Xf[i][a] * Xf[i][b] for i in range(len(yf))) for b in range(p)] for a in range(p)]
    xty = [sum(wf[i] * Xf[i][a] * yf[i] for i in range(len(yf))) for a in range(p)]
    ident = [[Fraction(int(a == b)) for a in range(p)] for b in range(p)]
    inv_cols = fr_solve(xtx, ident)
    inv = [[inv_cols[j][i] for j in range(p)] for i in range(p)]
    b = [sum(inv[a][k] * xty[k] for k in range(p)) for a in range(p)]
    e = [yf[i] - sum(Xf[i][a] * b[a] for a in range(p)) for i in range(len(yf))]
    if w is not None:
        rss = sum(wf[i] * e[i] * e[i] for i in range(len(yf)))
        df = len([v for v in wf if v != 0]) - p
        s2 = rss / df
        return {"coef": [float(v) for v in b], "se": [math.sqrt(s2 * inv[a][a]) for a in range(p)],
                "rss": float(rss)}
    h = [sum(Xf[i][a] * inv[a][k] * Xf[i][k] for a in range(p) for k in range(p)) for i in range(len(yf))]
    omega = [e[i] * e[i] / ((1 - h[i]) ** 2) for i in range(len(yf))]
    meat = [[sum(omega[i] * Xf[i][a] * Xf[i][c] for i in range(len(yf))) for c in range(p)] for a in range(p)]
    se = []
    for a in range(p):
        v = sum(inv[a][k] * meat[k][l] * inv[l][a] for k in range(p) for l in range(p))
        se.append(math.sqrt(v))
    return se


def wls_design(name, seed, n_per, offset=0.0):
    rows = design(seed, n_per, offset, weighted=True)
    rows[3][4] = 0  # one row of weight 0: left out of the fit and of the df
    write_csv(name + ".csv", ["g", "h", "x", "y", "w"], rows)
    data = read_back(name + ".csv")
    y = np.array([float(r["y"]) for r in data])
    w = np.array([float(r["w"]) for r in data])
    cols = columns(data)
    order = ["intercept", "g", "x"]
    X = np.hstack([cols[t] for t in order])
    keep = w > 0
    Xw = X[keep] * np.sqrt(w[keep])[:, None]
    yw = y[keep] * np.sqrt(w[keep])
    b, *_ = np.linalg.lstsq(Xw, yw, rcond=None)
    e = yw - Xw @ b
    rss = float(e @ e)
    df = int(keep.sum()) - X.shape[1]
    s2 = rss / df
    inv = np.linalg.inv(Xw.T @ Xw)
    se = np.sqrt(s2 * np.diag(inv))
    ybar = np.sum(w * y) / np.sum(w)
    tss = float(np.sum(w * (y - ybar) ** 2))
    # Type II F of g: weighted extra sum of squares.
    X0 = Xw[:, [0, 3]]
    b0, *_ = np.linalg.lstsq(X0, yw, rcond=None)
    rss0 = float(((yw - X0 @ b0) ** 2).sum())
    f_g = ((rss0 - rss) / 2) / s2
    xm = np.mean([float(r["x"]) for r, k in zip(data, keep) if k])
    means = []
    for gi in range(3):
        row = np.array([1.0, float(gi == 1), float(gi == 2), xm])
        means.append([float(row @ b), float(math.sqrt(s2 * row @ inv @ row))])
    # Weighted residuals sqrt(w) e, for the Shapiro-Wilk check.
    if offset:
        return {"source": SOURCE, "n": int(keep.sum()), "df": df, "exact": exact_hc3(X, y, w)}
    sw = stats.shapiro(e)
    out = {"source": SOURCE, "n": int(keep.sum()), "df": df, "coef": b.tolist(), "se": se.tolist(),
           "sigma": math.sqrt(s2), "r_squared": 1 - rss / tss, "f_g": f_g, "means": means,
           "shapiro_w": float(sw.statistic), "shapiro_p": float(sw.pvalue)}
    return out


def main():
    os.makedirs(OUT, exist_ok=True)
    check_quadrature()
    ref = {
        "oneway": oneway(),
        "ancova": ancova(),
        "table": table(),
        "hc3": [hc3_design("hc3-%d" % i, 100 + i, n) for i, n in
                enumerate([[4, 6, 5, 3, 7, 5], [3, 3, 8, 4, 5, 6], [6, 2, 4, 7, 3, 5]])],
        "hc3_offset": hc3_design("hc3-offset", 200, [4, 6, 5, 3, 7, 5], offset=1e6),
        "wls": [wls_design("wls-%d" % i, 300 + i, n) for i, n in
                enumerate([[4, 6, 5, 3, 7, 5], [5, 3, 6, 4, 4, 6]])],
        "wls_offset": wls_design("wls-offset", 400, [4, 6, 5, 3, 7, 5], offset=1e6),
    }
    with open(os.path.join(OUT, "reference.json"), "w") as f:
        json.dump(ref, f, indent=1, sort_keys=True)
        f.write("\n")


if __name__ == "__main__":
    main()
