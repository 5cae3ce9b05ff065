"""Reference values for the heteroscedasticity-robust engines (`trimmed`, `hc`) and the
trimmed-mean building blocks (METHODS §4 and §7).

Library calls (recorded in each record's `call`):
* One factor: statsmodels `stats.oneway.anova_oneway(cells, use_var='unequal',
  trim_frac=γ)` — Welch's heteroscedastic F on trimmed means, which Johansen's test
  reduces to for one factor (METHODS §4.2).
* Two cells: scipy `stats.ttest_ind(x, y, equal_var=False, trim=γ)` (Yuen 1974) with
  `.confidence_interval(0.95)`.
* HC0–HC3: statsmodels `ols('yy ~ C(f0, Sum)*C(f1, Sum)…').fit(cov_type='HC0'..'HC3')
  .wald_test(R, use_f=True, scalar=True)` with R selecting the term's coefficient block
  (the Type III hypothesis under sum coding), and `anova_lm(fit, typ=3, robust='hc3')`.
  At γ = 0 Johansen's Q equals q × the HC2 Wald F (METHODS §4.2).

Independent numpy implementations, written from the papers because no library has
them (METHODS Overrides 12):
* HC4 (Cribari-Neto 2004, Computational Statistics & Data Analysis 45:215–233): the full
  observation-level sandwich (X'X)⁻¹X' diag(e_i²/(1 − h_i)^δ_i) X (X'X)⁻¹ with
  δ_i = min(4, N·h_i/p) on statsmodels' own sum-coded design matrix — not the cell-level
  closed form that quorum uses.
* Factorial Welch–James on trimmed means (Johansen 1980, Biometrika 67:85–92; Lix &
  Keselman 1995, Psychological Bulletin 117:547–560; Keselman, Wilcox & Lix 2003,
  Psychophysiology 40:586–596): trimmed means from scipy `trim_mean`, winsorized
  variances from scipy `mstats.winsorize`, Helmert contrasts (a different L from
  quorum's [I | −1]; the test does not depend on the basis), the full matrix
  R = V L'(LVL')⁻¹L, and the adjusted-critical-value p found by root-finding
  (scipy `brentq`) on James's critical-value equation instead of quorum's closed form.
* Algina, Keselman & Penfield (2005, Psychological Methods 10:317–328) robust d with
  c_γ from numerical integration of the winsorized standard normal (scipy `quad`).
* Bootstrap critical value of Johansen's Q (METHODS §4.3; Keselman, Wilcox & Lix 2003):
  cells centred at their trimmed means, stratified resampling with numpy's generator;
  compared with quorum's own streams at the Monte Carlo tolerance.
"""
import itertools

import numpy as np
import pandas as pd
import scipy.stats as st
import statsmodels.formula.api as smf
from scipy import integrate, optimize
from scipy.stats import mstats
from statsmodels.stats.anova import anova_lm
from statsmodels.stats.oneway import anova_oneway

from gen import _datasets as ds

TRIMS = [0.0, 0.1, 0.2]


def frame(name):
    df, outcome, factors, csv = ds.ALL[name]()
    src = ds.complete(df, outcome, factors)
    d = pd.DataFrame({"yy": src[outcome].astype(float)})
    for i, f in enumerate(factors):
        d[f"f{i}"] = src[f]
    return d, outcome, factors, f"tests/data/{csv}"


def levels_of(d, i):
    return sorted(d[f"f{i}"].unique())


def cells_of(d, k):
    """Cells in row-major order (last factor fastest) with their level labels."""
    levels = [levels_of(d, i) for i in range(k)]
    out = []
    for combo in itertools.product(*levels):
        sel = np.ones(len(d), dtype=bool)
        for i, lv in enumerate(combo):
            sel &= (d[f"f{i}"] == lv).to_numpy()
        out.append((list(combo), d.loc[sel, "yy"].to_numpy(dtype=float)))
    return levels, out


def terms_of(k):
    subsets = [s for r in range(1, k + 1) for s in itertools.combinations(range(k), r)]
    return subsets


def helmert(a):
    h = np.zeros((a - 1, a))
    for i in range(1, a):
        h[i - 1, :i] = 1.0
        h[i - 1, i] = -float(i)
    return h


def term_matrix(shape, subset):
    m = np.ones((1, 1))
    for f, a in enumerate(shape):
        m = np.kron(m, helmert(a) if f in subset else np.ones((1, a)))
    return m


def trimmed_summary(x, gamma):
    """(n, h, trimmed mean, winsorized variance, d) from scipy's trim_mean and winsorize."""
    n = len(x)
    g = int(np.floor(gamma * n))
    h = n - 2 * g
    tm = float(st.trim_mean(x, gamma)) if gamma > 0 else float(np.mean(x))
    w = np.asarray(mstats.winsorize(np.sort(x), limits=(gamma, gamma)), dtype=float)
    wv = float(np.var(w, ddof=1))
    d = (n - 1) * wv / (h * (h - 1))
    return n, h, tm, wv, d


def winsorized_normal_scale(gamma):
    """c_γ = sd of the γ-winsorized N(0,1), by numerical integration (not the closed form)."""
    if gamma == 0:
        return 1.0
    z = st.norm.ppf(1 - gamma)
    inner, _ = integrate.quad(lambda x: x * x * st.norm.pdf(x), -z, z, epsabs=1e-14, epsrel=1e-13)
    return float(np.sqrt(inner + 2 * gamma * z * z))


def johansen(L, mu, d, h):
    q = L.shape[0]
    V = np.diag(d)
    M = L @ V @ L.T
    Minv = np.linalg.inv(M)
    lm = L @ mu
    Q = float(lm @ Minv @ lm)
    R = V @ L.T @ Minv @ L
    A = float(np.sum(np.diag(R) ** 2 / (h - 1)))
    c = q + 2 * A - 6 * A / (q + 2)
    nu2 = q * (q + 2) / (3 * A)
    F = Q / c
    # James-type adjusted critical value: reject when Q ≥ c[1 + (3c + q + 2)A/(2q(q + 2))];
    # the p-value is the χ²_q tail at the c that makes this an equality.
    crit = optimize.brentq(lambda x: x * (1 + (3 * x + q + 2) * A / (2 * q * (q + 2))) - Q, 0.0, max(Q, 1e-300),
                           xtol=1e-300, rtol=4 * np.finfo(float).eps, maxiter=500)
    return {"Q": Q, "A": A, "c_J": c, "df1": float(q), "df2": nu2, "F": F,
            "p_F": float(st.f.sf(F, q, nu2)), "p_adjusted": float(st.chi2.sf(crit, q))}


def factorial_welch_james(name, gamma):
    d, outcome, factors, csv = frame(name)
    k = len(factors)
    levels, cells = cells_of(d, k)
    shape = [len(lv) for lv in levels]
    summ = [trimmed_summary(y, gamma) for _, y in cells]
    n = np.array([s[0] for s in summ], dtype=float)
    h = np.array([s[1] for s in summ], dtype=float)
    mu = np.array([s[2] for s in summ])
    wv = np.array([s[3] for s in summ])
    dd = np.array([s[4] for s in summ])
    c_gamma = winsorized_normal_scale(gamma)
    sw = np.sqrt(np.sum((n - 1) * wv) / (np.sum(n) - len(n)))
    rows = []
    for subset in terms_of(k):
        L = term_matrix(shape, subset)
        row = {"term": ":".join(factors[f] for f in subset), **johansen(L, mu, dd, h)}
        if L.shape[0] == 1:
            ell = L[0] / L[0][L[0] > 0].sum()
            row["robust_d"] = float(c_gamma * (ell @ mu) / sw)
        rows.append(row)
    return {"csv": csv, "outcome": outcome, "factors": factors, "trim": gamma,
            "cells": [{"levels": [str(x) for x in lv], "n": int(s[0]), "h": int(s[1]), "trimmed_mean": s[2],
                       "winsorized_variance": s[3], "d": s[4]} for (lv, _), s in zip(cells, summ)],
            "c_gamma": c_gamma, "terms": rows,
            "call": "numpy Johansen (Helmert L, full R) on scipy trim_mean / mstats.winsorize; brentq for the "
                    "adjusted critical value; AKP c_gamma by scipy.integrate.quad"}


def hc_tests(name):
    d, outcome, factors, csv = frame(name)
    k = len(factors)
    rhs = " * ".join(f"C(f{i}, Sum)" for i in range(k))
    formula = f"yy ~ {rhs}"
    base = smf.ols(formula, data=d).fit()
    di = base.model.data.model_spec  # patsy DesignInfo of the formula
    X = base.model.exog
    N, p = X.shape
    out = {"csv": csv, "outcome": outcome, "factors": factors, "df_resid": float(base.df_resid)}
    slices = {}
    for tname, sl in di.term_name_slices.items():
        if tname == "Intercept":
            continue
        idx = [int(x.split(",")[0][3:]) for x in tname.split(":")]
        slices[":".join(factors[i] for i in idx)] = sl
    for ct in ("HC0", "HC1", "HC2", "HC3"):
        fit = smf.ols(formula, data=d).fit(cov_type=ct)
        rows = []
        for term, sl in slices.items():
            R = np.zeros((sl.stop - sl.start, p))
            for j, col in enumerate(range(sl.start, sl.stop)):
                R[j, col] = 1.0
            w = fit.wald_test(R, use_f=True, scalar=True)
            rows.append({"term": term, "F": float(w.statistic), "df1": float(w.df_num), "df2": float(w.df_denom),
                         "p": float(w.pvalue)})
        out[ct] = rows
    out["HC_call"] = f"ols('{formula}').fit(cov_type=HCk).wald_test(R_term, use_f=True, scalar=True)"
    # anova_lm's robust Type III table (HC3).
    table = anova_lm(base, typ=3, robust="hc3")
    rows = []
    for label, r in table.iterrows():
        if label in ("Intercept", "Residual"):
            continue
        idx = [int(x.split(",")[0][3:]) for x in label.split(":")]
        rows.append({"term": ":".join(factors[i] for i in idx), "F": float(r["F"]), "p": float(r["PR(>F)"])})
    out["anova_lm_hc3"] = rows
    out["anova_lm_call"] = f"anova_lm(ols('{formula}').fit(), typ=3, robust='hc3')"
    # HC4: the observation-level sandwich written out (statsmodels has no HC4).
    beta = np.linalg.lstsq(X, d.yy.to_numpy(), rcond=None)[0]
    e = d.yy.to_numpy() - X @ beta
    xtx_inv = np.linalg.inv(X.T @ X)
    lev = np.einsum("ij,jk,ik->i", X, xtx_inv, X)
    delta = np.minimum(4.0, N * lev / p)
    omega = (1.0 - lev) ** (-delta)
    meat = X.T @ (X * (omega * e * e)[:, None])
    V = xtx_inv @ meat @ xtx_inv
    rows = []
    for term, sl in slices.items():
        b = beta[sl]
        vs = V[sl, sl]
        q = len(b)
        F = float(b @ np.linalg.solve(vs, b) / q)
        rows.append({"term": term, "F": F, "df1": float(q), "df2": float(N - p), "p": float(st.f.sf(F, q, N - p))})
    out["HC4"] = rows
    out["HC4_call"] = "numpy sandwich (X'X)^-1 X' diag(e^2/(1-h)^delta) X (X'X)^-1, delta = min(4, N h/p)"
    return out


def one_factor(name, factor):
    df, outcome, factors, csv = ds.ALL[name]()
    src = ds.complete(df, outcome, [factor])
    levels = sorted(src[factor].unique())
    groups = [src.loc[src[factor] == lv, outcome].to_numpy(dtype=float) for lv in levels]
    rows = []
    for g in TRIMS:
        r = anova_oneway(groups, use_var="unequal", trim_frac=g)
        rows.append({"trim": g, "F": float(r.statistic), "df1": float(r.df[0]), "df2": float(r.df[1]),
                     "p": float(r.pvalue)})
    return {"csv": f"tests/data/{csv}", "outcome": outcome, "factors": [factor],
            "levels": [str(x) for x in levels], "tests": rows,
            "call": "statsmodels.stats.oneway.anova_oneway(groups, use_var='unequal', trim_frac=trim)"}


def methods12_one_way():
    """The six §12 cells as one factor (library-level check of the Welch reduction)."""
    cells = list(ds.METHODS12.values())
    rows = []
    for g in TRIMS:
        r = anova_oneway(cells, use_var="unequal", trim_frac=g)
        rows.append({"trim": g, "F": float(r.statistic), "df1": float(r.df[0]), "df2": float(r.df[1]),
                     "p": float(r.pvalue)})
    return {"cells": cells, "tests": rows,
            "call": "statsmodels.stats.oneway.anova_oneway(cells, use_var='unequal', trim_frac=trim)"}


def yuen_pairs():
    out = []
    specs = [("methods12", ("a1", "b3"), ("a2", "b3")), ("methods12", ("a1", "b1"), ("a2", "b1")),
             ("methods12", ("a1", "b2"), ("a2", "b2")), ("warpbreaks", ("A", "L"), ("B", "M")),
             ("penguins", ("Adelie", "female"), ("Gentoo", "male")), ("penguins", ("Chinstrap", "female"),
                                                                      ("Chinstrap", "male"))]
    for name, first, second in specs:
        d, outcome, factors, csv = frame(name)

        def pick(levels):
            sel = np.ones(len(d), dtype=bool)
            for i, lv in enumerate(levels):
                sel &= (d[f"f{i}"].astype(str) == lv).to_numpy()
            return d.loc[sel, "yy"].to_numpy(dtype=float)

        x, y = pick(first), pick(second)
        for g in TRIMS:
            r = st.ttest_ind(x, y, equal_var=False, trim=g)
            ci = r.confidence_interval(0.95)
            sx, sy = trimmed_summary(x, g), trimmed_summary(y, g)
            sw = np.sqrt(((sx[0] - 1) * sx[3] + (sy[0] - 1) * sy[3]) / (sx[0] + sy[0] - 2))
            out.append({"csv": csv, "outcome": outcome, "factors": factors, "first": list(first),
                        "second": list(second), "trim": g, "T": float(r.statistic), "df": float(r.df),
                        "p": float(r.pvalue), "ci_low": float(ci.low), "ci_high": float(ci.high),
                        "robust_d": float(winsorized_normal_scale(g) * (sy[2] - sx[2]) / sw)})
    return {"pairs": out,
            "call": "scipy.stats.ttest_ind(x, y, equal_var=False, trim=trim) and .confidence_interval(0.95); "
                    "robust_d = AKP with c_gamma by quad (numpy)"}


def bootstrap_reference(name, gamma, B, seed):
    """Bootstrap p of Johansen's Q with numpy's generator (Monte Carlo reference)."""
    d, outcome, factors, csv = frame(name)
    k = len(factors)
    levels, cells = cells_of(d, k)
    shape = [len(lv) for lv in levels]
    summ = [trimmed_summary(y, gamma) for _, y in cells]
    mu = np.array([s[2] for s in summ])
    dd = np.array([s[4] for s in summ])
    h = np.array([s[1] for s in summ], dtype=float)
    rng = np.random.default_rng(seed)
    mus = np.empty((B, len(cells)))
    ds_ = np.empty((B, len(cells)))
    for c, ((_, y), s) in enumerate(zip(cells, summ)):
        n = len(y)
        g = int(np.floor(gamma * n))
        hh = n - 2 * g
        centred = y - s[2]
        samp = np.sort(centred[rng.integers(0, n, size=(B, n))], axis=1)
        kept = samp[:, g:n - g]
        mus[:, c] = kept.mean(axis=1)
        w = np.clip(samp, samp[:, [g]], samp[:, [n - g - 1]])
        ds_[:, c] = (n - 1) * w.var(axis=1, ddof=1) / (hh * (hh - 1))
    rows = []
    for subset in terms_of(k):
        L = term_matrix(shape, subset)
        Q = johansen(L, mu, dd, h)["Q"]
        lm = mus @ L.T
        M = np.einsum("qc,bc,rc->bqr", L, ds_, L)
        qstar = np.einsum("bq,bq->b", lm, np.linalg.solve(M, lm[..., None])[..., 0])
        b = int(np.sum(qstar >= Q * (1 - 1e-10)))
        p = (1 + b) / (B + 1)
        ph = b / B
        rows.append({"term": ":".join(factors[f] for f in subset), "Q": Q, "exceedances": b, "resamples": B,
                     "p": p, "se": float(np.sqrt(ph * (1 - ph) / B))})
    return {"csv": csv, "outcome": outcome, "factors": factors, "trim": gamma, "terms": rows,
            "call": f"numpy default_rng({seed}) stratified bootstrap of trimmed-mean-centred cells, B = {B}"}


def generate():
    out = {"one_factor": {
        "warpbreaks_tension": one_factor("warpbreaks", "tension"),
        "penguins_species": one_factor("penguins", "species"),
        "penguins_sex": one_factor("penguins", "sex"),
        "toothgrowth_dose": one_factor("toothgrowth", "dose"),
        "threeway_B": one_factor("threeway", "B"),
    }, "methods12_one_way": methods12_one_way(), "yuen": yuen_pairs()}
    out["hc"] = {name: hc_tests(name) for name in ("methods12", "warpbreaks", "penguins", "toothgrowth", "threeway")}
    out["welch_james"] = {f"{name}@{g}": factorial_welch_james(name, g)
                          for name in ("methods12", "warpbreaks", "penguins", "toothgrowth", "threeway")
                          for g in TRIMS}
    out["bootstrap"] = {"methods12": bootstrap_reference("methods12", 0.2, 40000, 20240611),
                        "warpbreaks": bootstrap_reference("warpbreaks", 0.2, 40000, 20240612)}
    return out
