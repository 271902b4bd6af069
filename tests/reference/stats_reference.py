#!/usr/bin/env python3
"""Reference values for the unit tests of src/stats (studentized range, Shapiro-Wilk,
Brown-Forsythe). The numbers printed here are pasted into the Rust tests; the tests never run
Python.

Rerun:
    python3 -m pip install scipy numpy
    python3 tests/reference/stats_reference.py

Sources of the values:
  * scipy.stats.studentized_range.cdf / .ppf for the studentized range grid. Note that scipy's
    .sf is 1 - cdf (integrated with absolute tolerance 1e-11), so it cannot check far upper
    tails, and for df >= 100000 scipy uses the infinite-df formula.
  * Far upper tails: for k = 2 the exact forms P(Q > q) = erfc(q / 2) (df infinite) and
    2 * scipy.stats.t.sf(q / sqrt(2), df) (finite df); for k > 2 the direct upper-tail double
    integral evaluated here with scipy.integrate.quad (relative tolerance 1e-13 inner, 1e-12
    outer).
  * scipy.stats.shapiro for Shapiro-Wilk, scipy.stats.levene(..., center='median') for
    Brown-Forsythe.
"""
import math

import numpy as np
from scipy import integrate, special, stats


def lcg_uniforms(seed, n):
    """64-bit linear congruential generator (Knuth's MMIX constants); the Rust tests carry the
    same generator. Returns n uniforms in [0, 1) with 53 random bits each."""
    mask = (1 << 64) - 1
    state = seed & mask
    out = []
    for _ in range(n):
        state = (state * 6364136223846793005 + 1442695040888963407) & mask
        out.append((state >> 11) / float(1 << 53))
    return out


def approx_normal(seed, n):
    """Sum of 12 uniforms minus 6 (pure arithmetic, so identical in Rust)."""
    u = lcg_uniforms(seed, 12 * n)
    return [sum(u[12 * i:12 * i + 12]) - 6.0 for i in range(n)]


def skewed(seed, n):
    """Cube of a uniform: strongly skewed, for a small Shapiro-Wilk p-value."""
    return [v * v * v for v in lcg_uniforms(seed, n)]


def tail_direct(q, k, df):
    """P(Q > q) from the direct upper-tail integral (no 1 - cdf), by nested scipy quad."""
    m = k - 1

    def inner(w):
        def f(z):
            a = special.ndtr(z)
            b = special.ndtr(z - w)
            if a <= 0.0:
                return 0.0
            r = min(b / a, 1.0)
            return k * math.exp(-0.5 * z * z) / math.sqrt(2 * math.pi) * a ** m * (
                -math.expm1(m * math.log1p(-r)) if r < 1.0 else 1.0)
        pts = sorted({0.0, w / 2.0, w})
        return integrate.quad(f, -9.0, 14.0, points=pts, epsabs=0.0, epsrel=1e-13,
                              limit=400)[0]

    if math.isinf(df):
        return inner(q)
    # outer over t = ln s with the chi density of s = sqrt(chi2_df / df)
    logc = math.log(2.0) + 0.5 * df * math.log(0.5 * df) - special.gammaln(0.5 * df)

    def g(t):
        s = math.exp(t)
        return math.exp(logc + df * t - 0.5 * df * s * s) * inner(q * s)

    centre = min(0.0, math.log(8.0 / q))
    return integrate.quad(g, centre - 60.0 / df - 10.0, 3.0, points=[centre, 0.0],
                          epsabs=0.0, epsrel=1e-12, limit=400)[0]


def studentized_range():
    sr = stats.studentized_range
    print("# studentized range: k df p q=ppf(p) cdf(q)  [scipy.stats.studentized_range]")
    for k in [2, 3, 5, 10, 20, 50, 100]:
        for df in [2.0, 3.0, 5.0, 10.0, 20.0, 60.0, 120.0, math.inf]:
            for p in [0.1, 0.5, 0.95, 0.99]:
                q = float(sr.ppf(p, k, df))
                print(f"({k}, {df!r}, {p!r}, {q!r}, {float(sr.cdf(q, k, df))!r}),")
    print("# cdf at fixed q for df = 1e6 (scipy switches to the infinite-df formula there)")
    for k in [2, 10, 100]:
        for q in [2.0, 4.0, 6.0]:
            print(f"({k}, 1e6, {q!r}, {float(sr.cdf(q, k, 1e6))!r}),")
    print("# far upper tail, k = 2 exact: (q, df, P(Q > q))  [scipy.special.erfc, scipy.stats.t.sf]")
    for q in [8.0, 10.0, 11.0, 12.0]:
        print(f"({q!r}, inf, {float(special.erfc(q / 2.0))!r}),")
    for df, q in [(2.0, 1e3), (2.0, 1e5), (2.0, 1e6), (5.0, 100.0), (5.0, 300.0), (10.0, 50.0),
                  (20.0, 30.0), (120.0, 12.0)]:
        print(f"({q!r}, {df!r}, {float(2.0 * stats.t.sf(q / math.sqrt(2.0), df))!r}),")
    print("# far upper tail, k > 2, direct integral: (q, k, df, P(Q > q))  [scipy.integrate.quad]")
    for q, k, df in [(10.0, 3, math.inf), (12.0, 5, math.inf), (12.0, 20, math.inf),
                     (13.0, 100, math.inf), (3000.0, 5, 2.0), (40.0, 10, 10.0),
                     (25.0, 20, 30.0), (14.0, 100, 120.0), (200.0, 50, 5.0)]:
        print(f"({q!r}, {k}, {df!r}, {tail_direct(q, k, df)!r}),")


def shapiro():
    print("# Shapiro-Wilk: name n W p  [scipy.stats.shapiro]")
    fixed = {
        "n3": [1.0, 2.0, 4.0],
        "n4": [2.1, 3.4, 1.9, 5.6],
        "n5": [148.0, 154.0, 158.0, 160.0, 161.0],
        "n11": [6.5, 7.1, 5.9, 8.3, 6.8, 7.7, 6.0, 9.9, 7.2, 6.6, 7.0],
    }
    for name, x in fixed.items():
        r = stats.shapiro(x)
        print(f"{name}: n={len(x)} W={float(r.statistic)!r} p={float(r.pvalue)!r}")
    for n in [20, 50, 200, 1000, 5000]:
        r = stats.shapiro(approx_normal(n, n))
        print(f"normal seed={n} n={n} W={float(r.statistic)!r} p={float(r.pvalue)!r}")
    for n in [30, 100]:
        r = stats.shapiro(skewed(7 + n, n))
        print(f"skewed seed={7 + n} n={n} W={float(r.statistic)!r} p={float(r.pvalue)!r}")


def levene():
    print("# Brown-Forsythe: F df1 df2 p  [scipy.stats.levene(center='median')]")
    sets = {
        "three": [[8.1, 9.4, 7.7, 10.2, 8.8], [12.0, 6.3, 9.9, 14.1, 5.2, 11.0],
                  [9.0, 9.3, 8.7, 9.1]],
        "two": [[1.0, 2.0, 3.0, 4.0, 10.0], [2.0, 2.5, 3.0, 3.5]],
        "four": [approx_normal(11, 9), [2.0 * v for v in approx_normal(12, 12)],
                 approx_normal(13, 7), [0.5 * v + 3.0 for v in approx_normal(14, 10)]],
    }
    for name, groups in sets.items():
        r = stats.levene(*groups, center="median")
        n = sum(len(g) for g in groups)
        print(f"{name}: F={float(r.statistic)!r} df1={len(groups) - 1} df2={n - len(groups)} "
              f"p={float(r.pvalue)!r}")


if __name__ == "__main__":
    np.set_printoptions(precision=17)
    studentized_range()
    shapiro()
    levene()
