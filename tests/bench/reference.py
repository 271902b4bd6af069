#!/usr/bin/env python3
"""Reference timing on the general-purpose Python stack (pandas, numpy, scipy).

Does the core of tests/bench/large.md: loads the CSV, fits the parallel-lines model
y ~ g + x and the separate-slopes model y ~ g + x + g:x by least squares (numpy.linalg.lstsq,
treatment coding with the first level as reference), and tests the interaction with an F test
(scipy.stats.f). It does less than covey's document (no Type I/II/III tables, no adjusted
means or pairs), so the comparison favours this script.

Usage: reference.py DATA.csv
"""
import sys

import numpy as np
import pandas as pd
from scipy import stats


def rss_of(design: np.ndarray, y: np.ndarray) -> tuple[float, int]:
    coef, _, rank, _ = np.linalg.lstsq(design, y, rcond=None)
    resid = y - design @ coef
    return float(resid @ resid), int(rank)


def main() -> None:
    frame = pd.read_csv(sys.argv[1])
    frame = frame.dropna(subset=["y", "x", "g"])
    y = frame["y"].to_numpy(dtype=float)
    x = frame["x"].to_numpy(dtype=float)
    levels = ["A", "B", "C", "D"]
    g = frame["g"].to_numpy()
    dummies = np.column_stack([(g == lev).astype(float) for lev in levels[1:]])
    ones = np.ones_like(y)
    parallel = np.column_stack([ones, dummies, x])
    separate = np.column_stack([parallel, dummies * x[:, None]])
    rss0, rank0 = rss_of(parallel, y)
    rss1, rank1 = rss_of(separate, y)
    df1 = rank1 - rank0
    df2 = len(y) - rank1
    f = ((rss0 - rss1) / df1) / (rss1 / df2)
    p = stats.f.sf(f, df1, df2)
    print(f"rows {len(y)} rss_parallel {rss0:.10g} rss_separate {rss1:.10g} F {f:.6g} p {p:.6g}")


if __name__ == "__main__":
    main()
