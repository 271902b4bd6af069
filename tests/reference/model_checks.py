#!/usr/bin/env python3
"""Independent reference values for the tests of covey's linear-model engine (src/model).

Everything here is recomputed from the model conventions (CONVENTIONS.md, "Model
conventions") with numpy least squares (numpy.linalg.lstsq / pinv) and scipy
distributions (scipy.stats.t, f, studentized_range); it shares no code with the engine.
The data are INVENTED (a fixed pseudo-random draw, rounded), not taken from any source.

Run:  python3 tests/reference/model_checks.py   (needs numpy, scipy)
It prints Rust constants that src/model/tests.rs holds verbatim.
"""
import itertools

import numpy as np
from scipy import stats


def invented_data():
    """Two factors a (a1..a3), b (b1, b2), covariate x; unbalanced cells. Invented."""
    rng = np.random.default_rng(20261201)
    counts = {("a1", "b1"): 5, ("a1", "b2"): 3, ("a2", "b1"): 4,
              ("a2", "b2"): 6, ("a3", "b1"): 3, ("a3", "b2"): 4}
    effa = {"a1": 0.0, "a2": 0.9, "a3": -0.3}
    effb = {"b1": 0.0, "b2": 0.9}
    slope = {"a1": 0.30, "a2": 0.32, "a3": 0.24}
    rows = []
    for (a, b), k in counts.items():
        for _ in range(k):
            x = round(float(rng.uniform(10.0, 30.0)), 1)
            y = 5.0 + effa[a] + effb[b] + slope[a] * x + float(rng.normal(0.0, 1.0))
            if (a, b) == ("a2", "b2"):
                y += 0.7
            rows.append((a, b, x, round(y, 2)))
    return rows


ROWS = invented_data()
A = [r[0] for r in ROWS]
B = [r[1] for r in ROWS]
X = np.array([r[2] for r in ROWS])
Y = np.array([r[3] for r in ROWS])
N = len(ROWS)
LA = ["a1", "a2", "a3"]
LB = ["b1", "b2"]


def ind(v, lev):
    return np.array([1.0 if u == lev else 0.0 for u in v])


def eff(v, levels, j):
    """Sum-to-zero column j: +1 for level j, -1 for the last level."""
    return ind(v, levels[j]) - ind(v, levels[-1])


def rss(cols):
    M = np.column_stack(cols)
    beta, *_ = np.linalg.lstsq(M, Y, rcond=None)
    r = Y - M @ beta
    return float(r @ r), int(np.linalg.matrix_rank(M))


one = np.ones(N)
# Treatment coding, column order as in the engine: intercept, a, b, a by b (a fastest), x.
ta = [ind(A, "a2"), ind(A, "a3")]
tb = [ind(B, "b2")]
tab = [ind(A, "a2") * ind(B, "b2"), ind(A, "a3") * ind(B, "b2")]
tx = [X]
# Effect coding for Type III.
ea = [eff(A, LA, 0), eff(A, LA, 1)]
eb = [eff(B, LB, 0)]
eab = [ea[0] * eb[0], ea[1] * eb[0]]

terms_t = {"a": ta, "b": tb, "a by b": tab, "x": tx}
order = ["a", "b", "a by b", "x"]
parts = {"a": {"a"}, "b": {"b"}, "a by b": {"a", "b"}, "x": {"x"}}

full = [one] + ta + tb + tab + tx
rss_full, rank_full = rss(full)
df_res = N - rank_full


def out(name, values):
    vals = ", ".join(repr(float(v)) for v in values)
    print(f"const {name}: &[f64] = &[{vals}];")


print("// Data (invented): a, b, x, y")
print("const DATA: &[(&str, &str, f64, f64)] = &[" + ", ".join(f'("{a}", "{b}", {x!r}, {y!r})' for a, b, x, y in ROWS) + "];")

# Type I.
seq = [one]
prev = rss(seq)[0]
t1 = []
for t in order:
    seq = seq + terms_t[t]
    cur = rss(seq)[0]
    t1.append(prev - cur)
    prev = cur
out("TYPE1_SS", t1)

# Type II.
t2 = []
for t in order:
    base = [one]
    for u in order:
        if u != t and not (parts[u] > parts[t]):
            base += terms_t[u]
    t2.append(rss(base)[0] - rss(base + terms_t[t])[0])
out("TYPE2_SS", t2)

# Type III (sum-to-zero coding, x raw).
terms_e = {"a": ea, "b": eb, "a by b": eab, "x": tx}
full_e = [one] + ea + eb + eab + tx
t3 = []
for t in order:
    cols = [one] + sum((terms_e[u] for u in order if u != t), [])
    t3.append(rss(cols)[0] - rss(full_e)[0])
out("TYPE3_SS", t3)
out("RSS_DF", [rss_full, df_res])

# Coefficients and covariance.
M = np.column_stack(full)
beta, *_ = np.linalg.lstsq(M, Y, rcond=None)
s2 = rss_full / df_res
cov = s2 * np.linalg.inv(M.T @ M)
out("COEF", beta)
out("COEF_SE", np.sqrt(np.diag(cov)))

# Summary statistics.
tss = float(((Y - Y.mean()) ** 2).sum())
r2 = 1 - rss_full / tss
dfm = rank_full - 1
F = ((tss - rss_full) / dfm) / s2
ll = -N / 2 * (np.log(2 * np.pi) + np.log(rss_full / N) + 1)
k = rank_full + 1
out("SUMMARY", [np.sqrt(s2), r2, 1 - (1 - r2) * (N - 1) / df_res, F, stats.f.sf(F, dfm, df_res),
                -2 * ll + 2 * k, -2 * ll + np.log(N) * k])

# Adjusted means of a: b averaged with equal weights, x at its mean.
xbar = X.mean()


def lrow(alev):
    a2 = 1.0 if alev == "a2" else 0.0
    a3 = 1.0 if alev == "a3" else 0.0
    return np.array([1.0, a2, a3, 0.5, 0.5 * a2, 0.5 * a3, xbar])


L = {lev: lrow(lev) for lev in LA}
out("MEANS_A", [L[l] @ beta for l in LA])
out("MEANS_A_SE", [np.sqrt(L[l] @ cov @ L[l]) for l in LA])

# Pairs of a: Tukey-Kramer and Holm p-values, Tukey limits.
pairs = list(itertools.combinations(LA, 2))
tk, raw, lo = [], [], []
qcrit = stats.studentized_range.ppf(0.95, 3, df_res) / np.sqrt(2)
for i, j in pairs:
    d = L[i] - L[j]
    est = d @ beta
    se = np.sqrt(d @ cov @ d)
    t = est / se
    tk.append(stats.studentized_range.sf(abs(t) * np.sqrt(2), 3, df_res))
    raw.append(2 * stats.t.sf(abs(t), df_res))
    lo.append(est - qcrit * se)
m = len(raw)
idx = np.argsort(raw, kind="stable")
holm = [0.0] * m
run = 0.0
for r, i in enumerate(idx):
    run = max(run, min(1.0, (m - r) * raw[i]))
    holm[i] = run
out("PAIRS_TUKEY_P", tk)
out("PAIRS_TUKEY_LOWER", lo)
out("PAIRS_HOLM_P", holm)

# Diagnostics of the full model (first three rows).
H = M @ np.linalg.inv(M.T @ M) @ M.T
h = np.diag(H)
e = Y - M @ beta
cook = e ** 2 * h / (rank_full * s2 * (1 - h) ** 2)
s2i = (rss_full - e ** 2 / (1 - h)) / (df_res - 1)
stud = e / np.sqrt(s2i * (1 - h))
out("DIAG_LEVERAGE", h[:3])
out("DIAG_COOK", cook[:3])
out("DIAG_STUDENT", stud[:3])

# Separate slopes model: a + x + a by x.
sm = [one] + ta + [X] + [ta[0] * X, ta[1] * X]
Ms = np.column_stack(sm)
bs, *_ = np.linalg.lstsq(Ms, Y, rcond=None)
rs = rss(sm)[0]
dfs = N - 6
covs = rs / dfs * np.linalg.inv(Ms.T @ Ms)
sl, sse = [], []
for j in range(3):
    lv = np.zeros(6)
    lv[3] = 1.0
    if j > 0:
        lv[3 + j] = 1.0
    sl.append(lv @ bs)
    sse.append(np.sqrt(lv @ covs @ lv))
out("SLOPES", sl)
out("SLOPES_SE", sse)
r0 = rss([one] + ta + [X])[0]
Fe = ((r0 - rs) / 2) / (rs / dfs)
out("SLOPES_EQ", [Fe, stats.f.sf(Fe, 2, dfs)])

# Johnson-Neyman for a1 - a2 at alpha 0.05: d(x) = -(b_a2 + b_a2x x).
la = np.zeros(6); la[1] = -1.0
lb = np.zeros(6); lb[4] = -1.0
a0, b0 = la @ bs, lb @ bs
vaa, vab, vbb = la @ covs @ la, la @ covs @ lb, lb @ covs @ lb
tc = stats.t.ppf(0.975, dfs)
coef = [b0 * b0 - tc ** 2 * vbb, 2 * (a0 * b0 - tc ** 2 * vab), a0 * a0 - tc ** 2 * vaa]
roots = np.sort(np.roots(coef).real) if (coef[1] ** 2 - 4 * coef[0] * coef[2]) > 0 else []
out("JN_A1_A2", list(roots) + [1.0 if coef[0] > 0 else -1.0])
