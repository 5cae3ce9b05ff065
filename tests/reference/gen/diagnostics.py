"""Diagnostics reference values (METHODS §2): scipy and numpy on samples and on every
cell of the shared datasets.

* Shapiro–Wilk: `scipy.stats.shapiro(x)` on normal, gamma(2) and tied (integer 1..5)
  samples from `numpy.random.default_rng(20240611)`, rounded to 6 decimals before the
  call so that both sides see the same numbers; n = 3..60, 100, 200, 500, 1000, 2000, 5000.
* Per cell of each dataset: `scipy.stats.shapiro`, `numpy.percentile(x, [25, 75])`
  (method='linear', type 7), `scipy.stats.median_abs_deviation(x, scale='normal')`,
  the Tukey fences at 1.5 and 3 × IQR and the MAD–median rule (K = 2.24) applied with
  numpy, each flagged point with its CSV line (header = line 1).
* Pooled residuals y − cell mean: `scipy.stats.skew(e, bias=False)`,
  `scipy.stats.kurtosis(e, bias=False)`, `scipy.stats.shapiro(e)`.
* Across cells: `scipy.stats.levene(*cells, center='mean')` and `center='median'`;
  variance ratio from `numpy.var(ddof=1)`; robust ratio from MADN²; n ratio;
  `scipy.stats.spearmanr(n_c, s2_c)`.
* Standard errors of G1 and G2: the Joanes & Gill (1998) formulas, and a Monte Carlo
  check: the standard deviation of `skew(bias=False)` / `kurtosis(bias=False)` over
  200 000 normal samples (numpy, seed 7) for n = 6, 8, 20.
* The normal-score transformations of skewness and kurtosis that the large-sample
  flag calibration inverts: `scipy.stats.skewtest` and `scipy.stats.kurtosistest`.
"""
import warnings

import numpy as np
import scipy.stats as st

from gen import _datasets as ds
from gen.descriptives import level_sort, se_g1, se_g2

K_MAD = 2.24


def shapiro_samples():
    rng = np.random.default_rng(20240611)
    out = []
    sizes = list(range(3, 61)) + [100, 200, 500, 1000, 2000, 5000]
    for n in sizes:
        for kind in ("normal", "gamma", "tied"):
            if kind == "tied" and n > 200:
                continue
            if kind == "normal":
                x = rng.standard_normal(n) * 3.0 + 10.0
            elif kind == "gamma":
                x = rng.gamma(2.0, 1.5, n)
            else:
                x = rng.integers(1, 6, n).astype(float)
            x = np.round(x, 6)
            if np.ptp(x) == 0:
                continue
            r = st.shapiro(x)
            out.append({"n": n, "kind": kind, "x": [float(v) for v in x],
                        "W": float(r.statistic), "p": float(r.pvalue),
                        "call": "scipy.stats.shapiro(x)"})
    return out


def screen(x, lines):
    q1, q3 = np.percentile(x, [25, 75])
    iqr = q3 - q1
    flagged = []
    for k, rule in ((1.5, "tukey-1.5"), (3.0, "tukey-3")):
        lo, hi = q1 - k * iqr, q3 + k * iqr
        for v, line in zip(x, lines):
            if v < lo or v > hi:
                flagged.append({"line": int(line), "value": float(v), "rule": rule})
    med = np.median(x)
    madn = float(st.median_abs_deviation(x, scale="normal"))
    if madn > 0:
        for v, line in zip(x, lines):
            if abs(v - med) / madn > K_MAD:
                flagged.append({"line": int(line), "value": float(v), "rule": "mad-median"})
    return float(q1), float(q3), madn, flagged


def dataset_entry(df, outcome, factors, csv):
    d, by_cell = ds.cells_with_lines(df, outcome, factors, level_sort)
    cells, values, resid = [], [], []
    outliers = []
    for combo, x, lines in by_cell:
        q1, q3, madn, flagged = screen(x, lines)
        name = ", ".join(f"{f}={lv}" for f, lv in zip(factors, combo))
        for o in flagged:
            outliers.append({"cell": name, **o})
        cell = {"levels": list(combo), "n": int(len(x)), "q1": q1, "q3": q3, "madn": madn}
        if len(x) >= 3 and np.ptp(x) > 0:
            r = st.shapiro(x)
            cell["shapiro"] = [float(r.statistic), float(r.pvalue)]
        else:
            cell["shapiro"] = None
        cells.append(cell)
        values.append(x)
        resid.extend(x - x.mean())
    resid = np.asarray(resid)
    lev = st.levene(*values, center="mean")
    bf = st.levene(*values, center="median")
    with_var = [x for x in values if len(x) >= 2]
    var = np.array([np.var(x, ddof=1) for x in with_var])
    madn2 = np.array([st.median_abs_deviation(x, scale="normal") ** 2 for x in with_var])
    ns = np.array([len(x) for x in values])
    sw = st.shapiro(resid)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", st.ConstantInputWarning)  # balanced: n has no ranks
        rho = st.spearmanr([len(x) for x in with_var], var).statistic
    return {
        "csv": f"tests/data/{csv}", "outcome": outcome, "factors": factors,
        "cells": cells,
        "outliers": outliers,
        "residuals": {"skewness": float(st.skew(resid, bias=False)),
                      "excess_kurtosis": float(st.kurtosis(resid, bias=False)),
                      "skewness_se": se_g1(len(resid)), "excess_kurtosis_se": se_g2(len(resid)),
                      "shapiro": [float(sw.statistic), float(sw.pvalue)]},
        "levene": [float(lev.statistic), float(lev.pvalue)],
        "brown_forsythe": [float(bf.statistic), float(bf.pvalue)],
        "variance_ratio": float(var.max() / var.min()),
        "robust_variance_ratio": float(madn2.max() / madn2.min()),
        "n_ratio": float(ns.max() / ns.min()),
        "spearman_n_variance": None if np.isnan(rho) else float(rho),
        "calls": "scipy.stats.levene(center='mean'|'median'), shapiro, skew/kurtosis(bias=False), "
                 "median_abs_deviation(scale='normal'), spearmanr; numpy.percentile(method='linear')",
    }


def moment_se_monte_carlo():
    rng = np.random.default_rng(7)
    out = []
    for n in (6, 8, 20):
        x = rng.standard_normal((200_000, n))
        g1 = st.skew(x, axis=1, bias=False)
        g2 = st.kurtosis(x, axis=1, bias=False)
        out.append({"n": n, "replicates": 200_000, "sd_g1": float(np.std(g1, ddof=1)),
                    "sd_g2": float(np.std(g2, ddof=1)), "se_g1_formula": se_g1(n), "se_g2_formula": se_g2(n)})
    return out


def normality_transforms():
    """D'Agostino's skewness and Anscombe & Glynn's kurtosis transformations, as
    `scipy.stats.skewtest(x).statistic` and `scipy.stats.kurtosistest(x).statistic`, with
    the moments they transform (`scipy.stats.skew(x)`, `scipy.stats.kurtosis(x,
    fisher=False)`), on normal, t(5) and lognormal samples from
    `numpy.random.default_rng(20261202)`; only the scalars are stored."""
    rng = np.random.default_rng(20261202)
    out = []
    for n in (20, 50, 300, 1000, 5700, 100_000, 1_000_000):
        for kind in ("normal", "t5", "lognormal"):
            if kind == "normal":
                x = rng.standard_normal(n)
            elif kind == "t5":
                x = rng.standard_t(5, n)
            else:
                x = rng.lognormal(0.0, 0.25, n)
            out.append({"n": n, "kind": kind,
                        "sqrt_b1": float(st.skew(x)), "b2": float(st.kurtosis(x, fisher=False)),
                        "z_skew": float(st.skewtest(x).statistic),
                        "z_kurtosis": float(st.kurtosistest(x).statistic),
                        "call": "scipy.stats.skewtest(x), scipy.stats.kurtosistest(x)"})
    return out


def generate():
    out = {"shapiro": shapiro_samples(), "moment_se_monte_carlo": moment_se_monte_carlo(),
           "normality_transforms": normality_transforms()}
    datasets = {}
    for name, loader in ds.ALL.items():
        df, outcome, factors, csv = loader()
        datasets[name] = dataset_entry(df, outcome, factors, csv)
    out["datasets"] = datasets
    return out
