"""Cell-table reference values: numpy and scipy on each cell of every dataset.

mean `numpy.mean`; sd `numpy.std(ddof=1)`; median `numpy.median`; trimmed mean
`scipy.stats.trim_mean(x, 0.2)`; winsorized sd `numpy.std(scipy.stats.mstats.winsorize(x,
limits=(0.2, 0.2)), ddof=1)`; G1/G2 `scipy.stats.skew/kurtosis(x, bias=False)`; their
standard errors from the Joanes & Gill (1998) formulas (METHODS §2.1); the mean's interval
`scipy.stats.t.interval(0.95, n-1, loc=mean, scale=scipy.stats.sem(x))`; quartiles
`numpy.percentile(x, [25, 75])` (type 7).
"""
import itertools

import numpy as np
import scipy.stats as st
from scipy.stats import mstats

from gen import _datasets as ds


def se_g1(n):
    return float(np.sqrt(6.0 * n * (n - 1) / ((n - 2) * (n + 1) * (n + 3)))) if n >= 3 else None


def se_g2(n):
    return float(2 * se_g1(n) * np.sqrt((n * n - 1.0) / ((n - 3) * (n + 5)))) if n >= 4 else None


def level_sort(values):
    try:
        return sorted(values, key=float)
    except ValueError:
        return sorted(values)


def cell(x):
    x = np.asarray(x, dtype=float)
    n = len(x)
    out = {"n": n, "mean": float(np.mean(x)), "median": float(np.median(x)),
           "trimmed_mean": float(st.trim_mean(x, 0.2)), "min": float(x.min()), "max": float(x.max()),
           "q1_q3": [float(v) for v in np.percentile(x, [25, 75])]}
    if n >= 2:
        out["sd"] = float(np.std(x, ddof=1))
        out["winsorized_sd"] = float(np.std(np.asarray(mstats.winsorize(x, limits=(0.2, 0.2))), ddof=1))
        lo, hi = st.t.interval(0.95, n - 1, loc=np.mean(x), scale=st.sem(x))
        out["mean_ci"] = [float(lo), float(hi)]
    out["skewness"] = float(st.skew(x, bias=False)) if n >= 3 else None
    out["excess_kurtosis"] = float(st.kurtosis(x, bias=False)) if n >= 4 else None
    out["skewness_se"] = se_g1(n)
    out["excess_kurtosis_se"] = se_g2(n)
    return out


def generate():
    out = {}
    for name, loader in ds.ALL.items():
        df, outcome, factors, csv = loader()
        d = ds.complete(df, outcome, factors)
        labels = [level_sort(list(d[f].astype(str).unique())) for f in factors]
        cells = []
        for combo in itertools.product(*labels):
            mask = np.ones(len(d), dtype=bool)
            for f, level in zip(factors, combo):
                mask &= d[f].astype(str).to_numpy() == level
            cells.append({"levels": list(combo), **cell(d.loc[mask, outcome].to_numpy())})
        out[name] = {"csv": f"tests/data/{csv}", "outcome": outcome, "factors": factors, "cells": cells}
    return out
