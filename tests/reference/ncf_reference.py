#!/usr/bin/env python3
"""Reference values for the noncentral F distribution and the power of the F test
(src/stats/ncf.rs, src/stats/power.rs), checked by tests/plan.rs. The tests read the files
written here; they never run Python.

Rerun:
    python3 -m venv /tmp/ref && /tmp/ref/bin/pip install numpy scipy
    /tmp/ref/bin/python tests/reference/ncf_reference.py

Writes, next to this script:
  * ncf_values.csv: df1, df2, lambda, x, cdf = scipy.stats.ncf.cdf(x, df1, df2, lambda),
    sf = scipy.stats.ncf.sf(...), over df1 1-20, df2 2-10,000 and noncentrality 0-400, at
    x = the 0.5%, 10%, 50%, 90% and 99.5% points (scipy.stats.ncf.ppf; scipy.stats.f for
    lambda = 0), and at x = 0.01 and 50.
  * ncf_critical.csv: alpha, df1, df2, the upper alpha point of the central F
    (scipy.stats.f.isf).
  * ncf_power.csv: groups, covariates, r_squared, f, alpha, n per group, power, where
    power = ncf.sf(f.isf(alpha, df1, df2), df1, df2, lambda), df1 = groups - 1,
    df2 = groups * n - groups - covariates, lambda = groups * n * f^2 / (1 - r_squared);
    and for each row with a target power, the smallest n reaching it, found by stepping n
    with scipy.
  * chi2_lower.csv: df, level, the lower (1 - level) point of chi-square
    (scipy.stats.chi2.ppf), behind the upper confidence limit of a pilot's SD.
  * plan_pilot.csv: plans made from the pilot of the worked document beet-trial.md
    (worked/data/beet-pilot.csv): the analysis of covariance fitted with numpy.linalg.lstsq,
    its residual SD sigma, the squared partial correlation r2 = 1 - RSS / RSS without the
    covariate, the SD without the covariate sigma / sqrt(1 - r2) (with sigma or its upper
    80% confidence limit), f of the means 70, 71.5, 73, and the smallest n for power 0.9
    with and without the covariate, with its power.

scipy (1.17.1 when these were made) computes the noncentral F through Boost's noncentral
beta distribution. As an independent check, every CDF value is also summed here term by term
as the Poisson mixture of regularized incomplete beta functions (scipy.special.betainc), with
no recurrence, and the script stops if the two differ by more than 1e-13.
"""
import csv
import math
import os

import numpy as np
import scipy
from scipy import special, stats

HERE = os.path.dirname(os.path.abspath(__file__))

DF1 = [1, 2, 3, 5, 8, 13, 20]
DF2 = [2, 3, 5, 10, 25, 60, 150, 400, 1200, 4000, 10000]
LAMBDA = [0.0, 0.5, 3.0, 12.0, 40.0, 100.0, 200.0, 300.0, 400.0]
QUANTILES = [0.005, 0.1, 0.5, 0.9, 0.995]
FIXED_X = [0.01, 50.0]

# The independent sum and scipy must agree this closely (absolute), or the script stops. The
# sum works from y = d1 x / (d1 x + d2) rounded to a double, which alone moves the CDF by
# about 1e-13 where it is steep in y (df2 = 2, lambda = 400, x in the thousands).
AGREE = 1e-12


def mixture_cdf(x, d1, d2, lam):
    """P(F' <= x) as the sum over j of Poisson(lam / 2) weights times I_y(d1/2 + j, d2/2),
    y = d1 x / (d1 x + d2), every term computed directly and the sum taken far past where
    the weights matter."""
    y = d1 * x / (d1 * x + d2)
    mu = lam / 2.0
    if mu == 0.0:
        return float(special.betainc(d1 / 2.0, d2 / 2.0, y))
    top = int(mu + 40.0 * math.sqrt(mu) + 60.0)
    j = np.arange(0, top + 1, dtype=float)
    logw = -mu + j * math.log(mu) - special.gammaln(j + 1.0)
    w = np.exp(logw)
    ib = special.betainc(d1 / 2.0 + j, d2 / 2.0, y)
    return float(math.fsum(w * ib))


def ncf_values():
    rows = []
    worst = [0.0]
    for d1 in DF1:
        for d2 in DF2:
            for lam in LAMBDA:
                xs = []
                for q in QUANTILES:
                    if lam == 0.0:
                        xs.append(float(stats.f.ppf(q, d1, d2)))
                    else:
                        xs.append(float(stats.ncf.ppf(q, d1, d2, lam)))
                xs.extend(FIXED_X)
                for x in xs:
                    if lam == 0.0:
                        cdf = float(stats.f.cdf(x, d1, d2))
                        sf = float(stats.f.sf(x, d1, d2))
                    else:
                        cdf = float(stats.ncf.cdf(x, d1, d2, lam))
                        sf = float(stats.ncf.sf(x, d1, d2, lam))
                    check = mixture_cdf(x, d1, d2, lam)
                    if abs(check - cdf) > AGREE:
                        raise SystemExit(
                            f"scipy and the mixture sum disagree at df1={d1} df2={d2} "
                            f"lambda={lam} x={x}: {cdf!r} vs {check!r}")
                    worst[0] = max(worst[0], abs(check - cdf))
                    rows.append([d1, d2, repr(lam), repr(x), repr(cdf), repr(sf)])
    with open(os.path.join(HERE, "ncf_values.csv"), "w", newline="") as f:
        w = csv.writer(f, lineterminator="\n")
        w.writerow(["df1", "df2", "lambda", "x", "cdf", "sf"])
        w.writerows(rows)
    print(f"largest difference between scipy and the mixture sum: {worst[0]:.3g}")
    return len(rows)


def critical():
    rows = []
    for alpha in [0.1, 0.05, 0.01, 0.001]:
        for d1 in [1, 2, 3, 4, 6, 10, 20]:
            for d2 in [1, 2, 3, 5, 10, 30, 100, 1000, 10000, 100000]:
                rows.append([repr(alpha), d1, d2, repr(float(stats.f.isf(alpha, d1, d2)))])
    with open(os.path.join(HERE, "ncf_critical.csv"), "w", newline="") as f:
        w = csv.writer(f, lineterminator="\n")
        w.writerow(["alpha", "df1", "df2", "critical"])
        w.writerows(rows)
    return len(rows)


def power(k, c, r2, eff, alpha, n):
    d1 = k - 1
    d2 = k * n - k - c
    lam = k * n * eff * eff / (1.0 - r2)
    crit = stats.f.isf(alpha, d1, d2)
    return float(stats.ncf.sf(crit, d1, d2, lam))


def smallest_n(k, c, r2, eff, alpha, target):
    n = 2
    while k * n - k - c < 1:
        n += 1
    while power(k, c, r2, eff, alpha, n) < target:
        n += 1
    return n


def plan_power():
    settings = [
        # groups, covariates, r_squared, f, alpha
        (2, 0, 0.0, 0.25, 0.05),
        (2, 0, 0.0, 0.5, 0.01),
        (3, 0, 0.0, 0.25, 0.05),
        (3, 1, 0.5, 0.25, 0.05),
        (3, 1, 0.3, 0.1, 0.05),
        (4, 2, 0.6, 0.2, 0.05),
        (5, 1, 0.4, 0.4, 0.1),
        (6, 3, 0.8, 0.15, 0.01),
        (10, 1, 0.25, 0.3, 0.05),
        (21, 0, 0.0, 0.2, 0.05),
    ]
    rows = []
    for k, c, r2, eff, alpha in settings:
        for target in [0.8, 0.9, 0.95]:
            n = smallest_n(k, c, r2, eff, alpha, target)
            rows.append([k, c, repr(r2), repr(eff), repr(alpha), repr(target), n,
                         repr(power(k, c, r2, eff, alpha, n)),
                         repr(power(k, c, r2, eff, alpha, n - 1)) if k * (n - 1) - k - c >= 1
                         else ""])
        for n in [3, 7, 20, 60]:
            if k * n - k - c >= 1:
                rows.append([k, c, repr(r2), repr(eff), repr(alpha), "", n,
                             repr(power(k, c, r2, eff, alpha, n)), ""])
    with open(os.path.join(HERE, "ncf_power.csv"), "w", newline="") as f:
        w = csv.writer(f, lineterminator="\n")
        w.writerow(["groups", "covariates", "r_squared", "f", "alpha", "target", "n",
                    "power", "power_one_less"])
        w.writerows(rows)
    return len(rows)


def chi2_lower():
    rows = []
    for df in [1, 2, 3, 5, 10, 17, 25, 40, 100, 1000]:
        for level in [0.8, 0.9, 0.95]:
            rows.append([df, repr(level), repr(float(stats.chi2.ppf(1.0 - level, df)))])
    with open(os.path.join(HERE, "chi2_lower.csv"), "w", newline="") as f:
        w = csv.writer(f, lineterminator="\n")
        w.writerow(["df", "level", "quantile"])
        w.writerows(rows)
    return len(rows)


def plan_pilot():
    path = os.path.join(HERE, "..", "..", "worked", "data", "beet-pilot.csv")
    with open(path, newline="") as f:
        rows = list(csv.DictReader(f))
    levels = ["uncoated", "coat-A", "coat-B"]
    g = np.array([levels.index(r["coating"]) for r in rows])
    x = np.array([float(r["previous_t_ha"]) for r in rows])
    y = np.array([float(r["roots_t_ha"]) for r in rows])
    groups = np.stack([(g == k).astype(float) for k in range(3)], axis=1)
    rss_with = float(np.sum((y - groups @ np.linalg.lstsq(groups, y, rcond=None)[0]) ** 2))
    design = np.column_stack([groups, x])
    coef = np.linalg.lstsq(design, y, rcond=None)[0]
    rss = float(np.sum((y - design @ coef) ** 2))
    df = len(y) - 4
    sigma = math.sqrt(rss / df)
    r2 = 1.0 - rss / rss_with
    means = np.array([70.0, 71.5, 73.0])
    spread = math.sqrt(float(np.mean((means - means.mean()) ** 2)))
    out = []
    for name, level, covariates in [("adjusted", None, 1), ("unadjusted", None, 0),
                                    ("cautious", 0.8, 1)]:
        s = sigma if level is None else sigma * math.sqrt(df / stats.chi2.ppf(1.0 - level, df))
        sd = s / math.sqrt(1.0 - r2)
        eff = spread / sd
        r2_plan = r2 if covariates else 0.0
        n = smallest_n(3, covariates, r2_plan, eff, 0.05, 0.9)
        out.append([name, repr(sigma), df, repr(r2), repr(sd), repr(eff), n,
                    repr(power(3, covariates, r2_plan, eff, 0.05, n))])
    with open(os.path.join(HERE, "plan_pilot.csv"), "w", newline="") as f:
        w = csv.writer(f, lineterminator="\n")
        w.writerow(["plan", "sigma", "df_residual", "r_squared", "sd", "effect_f", "n_per_group",
                    "power"])
        w.writerows(out)
    return len(out)


if __name__ == "__main__":
    print(f"scipy {scipy.__version__}")
    print(f"ncf_values.csv: {ncf_values()} rows")
    print(f"ncf_critical.csv: {critical()} rows")
    print(f"ncf_power.csv: {plan_power()} rows")
    print(f"chi2_lower.csv: {chi2_lower()} rows")
    print(f"plan_pilot.csv: {plan_pilot()} rows")
