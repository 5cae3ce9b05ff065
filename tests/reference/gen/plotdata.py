"""Reference values for the report's plot data (src/diagnostics/plotdata.rs).

Per dataset of gen/_datasets.py (CSV lines: header = line 1):

* per cell: `numpy.percentile(x, [25, 50, 75])` (method='linear', Hyndman & Fan type 7);
  Tukey's whisker ends, the most extreme values within Q1 − 1.5·IQR and Q3 + 1.5·IQR
  (numpy); the CSV lines beyond 1.5 × IQR and beyond 3 × IQR;
* internally studentized residuals of the cell-means model:
  `statsmodels.formula.api.ols("Q('y') ~ cellid", df).fit()` (cellid: the cell as a string) then
  `statsmodels.stats.outlierinfluence.OLSInfluence(fit).resid_studentized_internal`,
  keyed by CSV line;
* normal Q-Q positions of the sorted standardized residuals at Blom's plotting positions
  (Blom 1958), `scipy.stats.norm.ppf((i - 0.375) / (n + 0.25))`, i = 1..n. (scipy's
  `probplot` uses Filliben's order-statistic medians instead; quorum states Blom's.)
* threeway only: the interaction means of B (axis) by A (series) averaged over C, the
  unweighted mean of the cell means with the pooled-error t interval
  SE = sqrt(MSE · Σ 1/n_c)/m, `scipy.stats.t.ppf(0.975, N − C)`.
"""

import numpy as np
import scipy.stats as st
import statsmodels.formula.api as smf
from statsmodels.stats.outliers_influence import OLSInfluence

from gen import _datasets as ds
from gen.descriptives import level_sort


def whiskers(x, q1, q3):
    iqr = q3 - q1
    lo, hi = q1 - 1.5 * iqr, q3 + 1.5 * iqr
    inside = x[(x >= lo) & (x <= hi)]
    return float(inside.min()), float(inside.max())


def dataset_entry(df, outcome, factors, csv):
    d, by_cell = ds.cells_with_lines(df, outcome, factors, level_sort)
    d["cellid"] = d[factors].astype(str).agg("|".join, axis=1)
    cells = []
    for combo, x, lines in by_cell:
        q1, med, q3 = np.percentile(x, [25, 50, 75])
        iqr = q3 - q1
        outside = [int(l) for v, l in zip(x, lines)
                   if (v < q1 - 1.5 * iqr or v > q3 + 1.5 * iqr) and not (v < q1 - 3 * iqr or v > q3 + 3 * iqr)]
        far = [int(l) for v, l in zip(x, lines) if v < q1 - 3 * iqr or v > q3 + 3 * iqr]
        wl, wh = whiskers(x, q1, q3)
        cells.append({"levels": list(combo), "n": int(len(x)), "q1": float(q1), "median": float(med),
                      "q3": float(q3), "whisker_low": wl, "whisker_high": wh,
                      "outside_lines": outside, "far_out_lines": far})
    fit = smf.ols(f"Q('{outcome}') ~ cellid", data=d).fit()
    r = OLSInfluence(fit).resid_studentized_internal
    std = {int(l): float(v) for l, v in zip(d["_line"], r)}
    order = np.argsort(np.asarray(r), kind="stable")
    n = len(r)
    positions = st.norm.ppf((np.arange(1, n + 1) - 0.375) / (n + 0.25))
    qq = [{"line": int(d["_line"].iloc[i]), "standardized": float(r.iloc[i]) if hasattr(r, "iloc") else float(r[i]),
           "theoretical": float(p)} for i, p in zip(order, positions)]
    return {"csv": f"tests/data/{csv}", "outcome": outcome, "factors": factors, "cells": cells,
            "standardized": [{"line": k, "value": v} for k, v in sorted(std.items())], "qq": qq,
            "calls": "numpy.percentile(method='linear'); statsmodels OLSInfluence.resid_studentized_internal "
                     "of ols('y ~ cell') (cell as a categorical string); scipy.stats.norm.ppf((i - 0.375)/(n + 0.25))"}


def averaged(df, outcome, factors, axis, series, over):
    d = ds.complete(df, outcome, factors)
    groups = d.groupby(factors)[outcome]
    means, ns = groups.mean(), groups.count()
    resid = d[outcome] - groups.transform("mean")
    n_total, n_cells = len(d), len(means)
    mse = float((resid ** 2).sum() / (n_total - n_cells))
    t = st.t.ppf(0.975, n_total - n_cells)
    out = []
    for a in level_sort(list(d[axis].astype(str).unique())):
        for s in level_sort(list(d[series].astype(str).unique())):
            keys = [k for k in means.index if str(k[factors.index(axis)]) == a and str(k[factors.index(series)]) == s]
            m = len(keys)
            mean = float(np.mean([means[k] for k in keys]))
            se = np.sqrt(mse * sum(1.0 / ns[k] for k in keys)) / m
            out.append({"axis": a, "series": s, "mean": mean, "low": float(mean - t * se),
                        "high": float(mean + t * se), "n": int(sum(ns[k] for k in keys))})
    return {"axis": axis, "series": series, "over": over, "means": out,
            "call": "pandas groupby means; scipy.stats.t.ppf(0.975, N - C)"}


def generate():
    out = {}
    for name, loader in ds.ALL.items():
        df, outcome, factors, csv = loader()
        out[name] = dataset_entry(df, outcome, factors, csv)
    df, outcome, factors, csv = ds.threeway()
    out["threeway"]["averaged"] = averaged(df, outcome, factors, "B", "A", ["C"])
    return {"datasets": out}
