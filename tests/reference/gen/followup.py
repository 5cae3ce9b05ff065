"""Reference values for the follow-ups (METHODS §9): simple effects, pairwise
comparisons, planned contrasts and trends, multiplicity control, the noncentral t,
and the within-slice permutation test.

Library calls (recorded in each record's `call`):
* Multiplicity: statsmodels `stats.multitest.multipletests(p, method='holm' |
  'simes-hochberg' | 'fdr_bh' | 'bonferroni')`.
* Tukey–Kramer and Games–Howell over every cell (the effect is all factors, no slice):
  scipy `stats.tukey_hsd(*cells)` and `tukey_hsd(*cells, equal_var=False)` with
  `.confidence_interval(0.95)`. Games–Howell within a slice compares the slice's cells
  with their own variances: scipy `tukey_hsd(*slice_cells, equal_var=False)`.
* Tukey–Kramer within a slice uses the full model's MSE (df N − C): estimate and SE from
  statsmodels `ols('y ~ 0 + C(cell)').fit().t_test(ℓ)`, p and critical value from scipy
  `stats.studentized_range.sf/.ppf`.
* Simple effects with the pooled error: statsmodels `ols('y ~ 0 + C(cell)').fit()
  .f_test(L)`; HC3: `.fit(cov_type='HC3').wald_test(L, use_f=True, scalar=True)`.
  The slice's own error, when the slice is one-way: scipy `f_oneway(*slice_cells)`;
  Welch–James on the slice: statsmodels `anova_oneway(slice_cells, use_var='unequal',
  trim_frac=0.2)`. Averaged slices (three factors): the independent numpy Johansen
  implementation of `gen/heteroscedastic.py` with quorum's L.
* Yuen: scipy `ttest_ind(x, y, trim=0.2, equal_var=False)` and its
  `.confidence_interval(0.95)`; Holm by `multipletests`.
* ART-C: `gen/rank.py`'s `artc` (statsmodels `t_test` on aligned ranks) for the factor
  set S ∪ R, then the slice's contrasts Holm-adjusted by `multipletests`.
* Planned contrasts and trends: statsmodels `t_test(ℓ)` on the cell-means model (plain
  and `cov_type='HC3', use_t=True`); trimmed: numpy Welch–Satterthwaite t on trimmed
  means (scipy `trim_mean`, `mstats.winsorize`); trend weights from numpy's QR of the
  Vandermonde matrix of the level values.
* Noncentral t: scipy `stats.nct.cdf`; the δ interval by scipy `optimize.brentq` on
  `nct.cdf`; Hedges' J from scipy `special.gammaln`.
* Permutation within a slice: exact counts by brute force over `itertools.combinations`
  (every assignment of the slice's values to its cells); Monte Carlo p-values from an
  independent numpy implementation (numpy `default_rng(…).permutation`, B large).
"""
import itertools
import math

import numpy as np
import pandas as pd
import scipy.stats as st
import statsmodels.formula.api as smf
from scipy import optimize, special
from scipy.stats import mstats
from statsmodels.stats.multitest import multipletests
from statsmodels.stats.oneway import anova_oneway

from gen import _datasets as ds
from gen import heteroscedastic as hs
from gen import rank as rk

MISSING = {"NA", "", ".", "NaN"}
LEVEL = 0.95
TRIM = 0.2


class Data:
    """A dataset read from its CSV as quorum reads it (labels as text, level order)."""

    def __init__(self, csv, outcome, factors):
        raw = pd.read_csv(ds.DATA / csv, dtype=str, keep_default_na=False)
        keep = ~raw[[outcome] + factors].isin(MISSING).any(axis=1)
        raw = raw[keep].reset_index(drop=True)
        self.csv, self.outcome, self.factors = f"tests/data/{csv}", outcome, factors
        self.y = raw[outcome].astype(float).to_numpy()
        self.levels = []
        for f in factors:
            labels = sorted(set(raw[f]))
            try:
                labels = sorted(labels, key=float)
            except ValueError:
                pass
            self.levels.append(labels)
        self.shape = [len(l) for l in self.levels]
        self.k = len(factors)
        self.combos = list(itertools.product(*[range(a) for a in self.shape]))
        index = {c: i for i, c in enumerate(self.combos)}
        self.cell = np.array([index[tuple(self.levels[i].index(raw[f][r]) for i, f in enumerate(factors))]
                              for r in range(len(raw))])
        self.C = len(self.combos)
        self.cells = [self.y[self.cell == c] for c in range(self.C)]
        self.frame = pd.DataFrame({"y": self.y, "cell": self.cell})
        self.fit = smf.ols("y ~ 0 + C(cell)", data=self.frame).fit()
        self.fit_hc3 = smf.ols("y ~ 0 + C(cell)", data=self.frame).fit(cov_type="HC3", use_t=True)
        self.mse = float(self.fit.mse_resid)
        self.df = float(self.fit.df_resid)
        self.trimmed = [hs.trimmed_summary(x, TRIM) for x in self.cells]

    def entry(self):
        return {"csv": self.csv, "outcome": self.outcome, "factors": self.factors}

    def in_slice(self, c, at, combo):
        return all(self.combos[c][f] == l for f, l in zip(at, combo))

    def slice_blocks(self, effect, at, combo):
        mats = []
        for f, a in enumerate(self.shape):
            if f in effect:
                mats.append(np.hstack([np.eye(a - 1), -np.ones((a - 1, 1))]))
            elif f in at:
                e = np.zeros((1, a))
                e[0, combo[at.index(f)]] = 1.0
                mats.append(e)
            else:
                mats.append(np.full((1, a), 1.0 / a))
        m = np.ones((1, 1))
        for b in mats:
            m = np.kron(m, b)
        return m


def one(x):
    return float(np.asarray(x).ravel()[0])


def multiplicity():
    rng = np.random.default_rng(7)
    lists = [[0.01, 0.04, 0.03, 0.005, 0.20, 0.04], [0.5], [0.001, 0.001, 0.2, 0.049, 0.051]]
    lists += [list(rng.uniform(0, 0.2, size=n)) for n in (4, 9, 15)]
    out = []
    for p in lists:
        rec = {"p": p, "call": "multipletests(p, method=…)[1]"}
        for name, method in [("holm", "holm"), ("hochberg", "simes-hochberg"), ("bh", "fdr_bh"),
                             ("bonferroni", "bonferroni")]:
            rec[name] = [float(v) for v in multipletests(p, method=method)[1]]
        out.append(rec)
    return out


def delta_interval(t, df, level):
    a = 1 - level
    f = lambda d, target: st.nct.cdf(t, df, d) - target
    lo = optimize.brentq(f, t - 6, t + 6, args=(1 - a / 2,), xtol=1e-14, rtol=1e-14)
    hi = optimize.brentq(f, t - 6, t + 6, args=(a / 2,), xtol=1e-14, rtol=1e-14)
    return lo, hi


def hedges_j(df):
    return math.exp(special.gammaln(df / 2) - 0.5 * math.log(df / 2) - special.gammaln((df - 1) / 2))


def nct_records():
    cdf = []
    for t in (-3.0, -0.8, 0.0, 0.4, 1.7, 3.2, 6.0):
        for df in (3.0, 9.5, 33.0, 200.0):
            for delta in (-2.5, -0.3, 0.0, 0.9, 2.2, 5.0):
                cdf.append([t, df, delta, float(st.nct.cdf(t, df, delta))])
    intervals = []
    for t, df in [(2.3, 20.0), (-1.1, 8.0), (0.2, 33.0), (4.5, 12.0), (-6.0, 50.0)]:
        lo, hi = delta_interval(t, df, LEVEL)
        intervals.append([t, df, LEVEL, lo, hi])
    return {"cdf": cdf, "intervals": intervals,
            "call": "scipy.stats.nct.cdf(t, df, delta); brentq on nct.cdf for the δ interval"}


def simple(d, effect, at):
    slices = []
    for combo in itertools.product(*[range(d.shape[f]) for f in at]):
        L = d.slice_blocks(effect, at, list(combo))
        ft = d.fit.f_test(L)
        wt = d.fit_hc3.wald_test(L, use_f=True, scalar=True)
        rec = {"levels": [d.levels[f][l] for f, l in zip(at, combo)],
               "pooled": {"F": one(ft.fvalue), "df1": float(ft.df_num), "df2": float(ft.df_denom), "p": one(ft.pvalue)},
               "hc3": {"F": one(wt.fvalue), "df1": float(wt.df_num), "df2": float(wt.df_denom), "p": one(wt.pvalue)}}
        in_slice = [c for c in range(d.C) if d.in_slice(c, at, list(combo))]
        if len(effect) == 1 and len(effect) + len(at) == d.k:
            cells = [d.cells[c] for c in in_slice]
            ow = st.f_oneway(*cells)
            n = sum(len(c) for c in cells)
            rec["slice"] = {"F": float(ow.statistic), "df2": float(n - len(cells)), "p": float(ow.pvalue),
                            "call": "scipy f_oneway(*slice_cells)"}
            wj = anova_oneway(cells, use_var="unequal", trim_frac=TRIM)
            rec["trimmed"] = {"F": float(wj.statistic), "df2": float(wj.df[1]), "p": float(wj.pvalue),
                              "call": "anova_oneway(slice_cells, use_var='unequal', trim_frac=0.2)"}
        else:
            mu = np.array([t[2] for t in d.trimmed])
            dd = np.array([t[4] for t in d.trimmed])
            h = np.array([t[1] for t in d.trimmed], dtype=float)
            cols = [c for c in range(d.C) if np.any(L[:, c] != 0)]
            j = hs.johansen(L[:, cols], mu[cols], dd[cols], h[cols])
            rec["trimmed"] = {"F": j["F"], "df2": j["df2"], "p": j["p_F"], "call": "numpy Johansen (gen/heteroscedastic.py)"}
            # The slice's own error with the contrast SS (numpy: (Lμ)'(LD⁻¹L')⁻¹(Lμ)).
            means = np.array([x.mean() for x in d.cells])
            n = np.array([len(x) for x in d.cells], dtype=float)
            lm = L @ means
            ss = float(lm @ np.linalg.solve(L @ np.diag(1 / n) @ L.T, lm))
            sse = sum(float(((d.cells[c] - d.cells[c].mean()) ** 2).sum()) for c in in_slice)
            df2 = float(sum(len(d.cells[c]) for c in in_slice) - len(in_slice))
            fv = (ss / L.shape[0]) / (sse / df2)
            rec["slice"] = {"F": fv, "df2": df2, "p": float(st.f.sf(fv, L.shape[0], df2)),
                            "call": "numpy contrast SS over the slice's pooled within-cell SS; scipy f.sf"}
        slices.append(rec)
    return {"effect": [d.factors[f] for f in effect], "at": [d.factors[f] for f in at], "slices": slices,
            "call": "ols('y ~ 0 + C(cell)').fit().f_test(L) / fit(cov_type='HC3').wald_test(L, use_f=True)"}


def all_cells(d):
    """Tukey–Kramer and Games–Howell over every cell (scipy tukey_hsd)."""
    out = {}
    for name, eq in [("tukey", True), ("games_howell", False)]:
        res = st.tukey_hsd(*d.cells, equal_var=eq)
        ci = res.confidence_interval(LEVEL)
        rows = []
        for i in range(d.C):
            for j in range(i + 1, d.C):
                rows.append({"first": [d.levels[f][d.combos[i][f]] for f in range(d.k)],
                             "second": [d.levels[f][d.combos[j][f]] for f in range(d.k)],
                             "estimate": float(res.statistic[i, j]), "p": float(res.pvalue[i, j]),
                             "ci_low": float(ci.low[i, j]), "ci_high": float(ci.high[i, j])})
        out[name] = rows
    out["call"] = "scipy.stats.tukey_hsd(*cells[, equal_var=False]).confidence_interval(0.95)"
    return out


def pairwise(d, rd, effect, at):
    others = [f for f in range(d.k) if f not in effect and f not in at]
    m_other = int(np.prod([d.shape[f] for f in others])) if others else 1
    combos = list(itertools.product(*[range(d.shape[f]) for f in effect]))
    m = len(combos)
    sset = sorted(effect + at)
    art = rk.artc(rd, "pairwise", sset)
    slices = []
    for scombo in itertools.product(*[range(d.shape[f]) for f in at]):
        rec = {"levels": [d.levels[f][l] for f, l in zip(at, scombo)], "tukey": [], "games_howell": [],
               "trimmed": [], "artc": []}
        slice_cells = []
        for i in range(m):
            for j in range(i + 1, m):
                ell = np.zeros(d.C)
                ci = cj = None
                for c in range(d.C):
                    if not d.in_slice(c, at, list(scombo)):
                        continue
                    if d.in_slice(c, effect, list(combos[i])):
                        ell[c] = 1.0 / m_other
                        ci = c
                    elif d.in_slice(c, effect, list(combos[j])):
                        ell[c] = -1.0 / m_other
                        cj = c
                tt = d.fit.t_test(ell.reshape(1, -1))
                est, se = one(tt.effect), one(tt.sd)
                q = math.sqrt(2) * abs(est) / se
                crit = st.studentized_range.ppf(LEVEL, m, d.df) / math.sqrt(2)
                k = math.sqrt(float(np.sum(ell ** 2 / np.array([len(x) for x in d.cells]))))
                lo, hi = delta_interval(est / se, d.df, LEVEL)
                jj = hedges_j(d.df)
                rec["tukey"].append({"estimate": est, "se": se, "q": q, "p": float(st.studentized_range.sf(q, m, d.df)),
                                     "ci_low": est - crit * se, "ci_high": est + crit * se,
                                     "g": jj * est / math.sqrt(d.mse), "g_low": jj * lo * k, "g_high": jj * hi * k})
                if not others:
                    x, y = d.cells[ci], d.cells[cj]
                    yu = st.ttest_ind(x, y, trim=TRIM, equal_var=False)
                    yci = yu.confidence_interval(LEVEL)
                    rec["trimmed"].append({"estimate": float(st.trim_mean(x, TRIM) - st.trim_mean(y, TRIM)),
                                           "t": float(yu.statistic), "df": float(yu.df), "p": float(yu.pvalue),
                                           "ci_low": float(yci.low), "ci_high": float(yci.high)})
                else:
                    mu = np.array([t[2] for t in d.trimmed])
                    dd = np.array([t[4] for t in d.trimmed])
                    h = np.array([t[1] for t in d.trimmed], dtype=float)
                    nz = ell != 0
                    est_t = float(ell[nz] @ mu[nz])
                    var = float(np.sum(ell[nz] ** 2 * dd[nz]))
                    nu = var ** 2 / float(np.sum(ell[nz] ** 4 * dd[nz] ** 2 / (h[nz] - 1)))
                    t = est_t / math.sqrt(var)
                    half = st.t.ppf(0.5 + LEVEL / 2, nu) * math.sqrt(var)
                    rec["trimmed"].append({"estimate": est_t, "t": t, "df": nu, "p": float(2 * st.t.sf(abs(t), nu)),
                                           "ci_low": est_t - half, "ci_high": est_t + half})
                # ART-C row of the same pair at this slice
                for row in art["contrasts"]:
                    ok = True
                    fi, se_ = [], []
                    for (name, a, b), f in zip(row["levels"], sset):
                        if f in at:
                            want = d.levels[f][scombo[at.index(f)]]
                            ok &= (a == want and b == want)
                        else:
                            fi.append(a)
                            se_.append(b)
                    if ok and fi == [d.levels[f][l] for f, l in zip(effect, combos[i])] \
                            and se_ == [d.levels[f][l] for f, l in zip(effect, combos[j])]:
                        rec["artc"].append({"estimate": row["estimate"], "se": row["se"], "t": row["t"], "p": row["p"]})
        if not others:
            slice_cells = [c for c in range(d.C) if d.in_slice(c, at, list(scombo))]
            res = st.tukey_hsd(*[d.cells[c] for c in slice_cells], equal_var=False)
            ci = res.confidence_interval(LEVEL)
            for i in range(m):
                for j in range(i + 1, m):
                    rec["games_howell"].append({"estimate": float(res.statistic[i, j]), "p": float(res.pvalue[i, j]),
                                                "ci_low": float(ci.low[i, j]), "ci_high": float(ci.high[i, j])})
        for key in ("trimmed", "artc"):
            ps = [r["p"] for r in rec[key]]
            if ps:
                for r, a in zip(rec[key], multipletests(ps, method="holm")[1]):
                    r["p_holm"] = float(a)
        slices.append(rec)
    return {"effect": [d.factors[f] for f in effect], "at": [d.factors[f] for f in at], "means_compared": m,
            "slices": slices}


def contrast(d, f, w):
    m_other = int(np.prod([a for g, a in enumerate(d.shape) if g != f]))
    ell = np.array([w[d.combos[c][f]] / m_other for c in range(d.C)])
    rec = {"factor": d.factors[f], "weights": list(map(float, w))}
    for name, fit in [("classical", d.fit), ("hc3", d.fit_hc3)]:
        tt = fit.t_test(ell.reshape(1, -1))
        ci = np.asarray(tt.conf_int(alpha=1 - LEVEL)).ravel()
        rec[name] = {"estimate": one(tt.effect), "se": one(tt.sd), "t": one(tt.tvalue), "p": one(tt.pvalue),
                     "df": float(tt.df_denom), "ci_low": float(ci[0]), "ci_high": float(ci[1])}
    est, se = rec["classical"]["estimate"], rec["classical"]["se"]
    lo, hi = delta_interval(est / se, d.df, LEVEL)
    k = math.sqrt(float(np.sum(ell ** 2 / np.array([len(x) for x in d.cells]))))
    jj = hedges_j(d.df)
    rec["classical"].update({"g": jj * est / math.sqrt(d.mse), "g_low": jj * lo * k, "g_high": jj * hi * k})
    mu = np.array([t[2] for t in d.trimmed])
    dd = np.array([t[4] for t in d.trimmed])
    h = np.array([t[1] for t in d.trimmed], dtype=float)
    nz = ell != 0
    est_t = float(ell[nz] @ mu[nz])
    var = float(np.sum(ell[nz] ** 2 * dd[nz]))
    nu = var ** 2 / float(np.sum(ell[nz] ** 4 * dd[nz] ** 2 / (h[nz] - 1)))
    t = est_t / math.sqrt(var)
    half = st.t.ppf(0.5 + LEVEL / 2, nu) * math.sqrt(var)
    rec["trimmed"] = {"estimate": est_t, "se": math.sqrt(var), "t": t, "df": nu, "p": float(2 * st.t.sf(abs(t), nu)),
                      "ci_low": est_t - half, "ci_high": est_t + half}
    rec["call"] = "ols('y ~ 0 + C(cell)').fit([cov_type='HC3', use_t=True]).t_test(ℓ); numpy Welch–Satterthwaite on trimmed means"
    return rec


def trend_weights(x):
    """Orthonormal polynomial contrasts from numpy's QR of the Vandermonde matrix."""
    x = np.asarray(x, dtype=float)
    v = np.vander(x - x.mean(), len(x), increasing=True)
    q, _ = np.linalg.qr(v)
    out = []
    for j in range(1, len(x)):
        col = q[:, j]
        if col[-1] < 0:
            col = -col
        out.append(list(map(float, col)))
    return out


def one_way_f(values, sizes):
    starts = np.cumsum([0] + sizes)
    groups = [values[starts[i]:starts[i + 1]] for i in range(len(sizes))]
    grand = values.mean()
    ssb = sum(len(g) * (g.mean() - grand) ** 2 for g in groups)
    sse = sum(((g - g.mean()) ** 2).sum() for g in groups)
    return (ssb / (len(groups) - 1)) / (sse / (len(values) - len(groups)))


def exact_slices(d, effect, at):
    """Brute force over every assignment of each one-way slice's values to its cells."""
    out = []
    for combo in itertools.product(*[range(d.shape[f]) for f in at]):
        cells = [d.cells[c] for c in range(d.C) if d.in_slice(c, at, list(combo))]
        values = np.concatenate(cells)
        sizes = [len(c) for c in cells]
        f_obs = one_way_f(values, sizes)
        n = len(values)
        count = total = 0
        assert len(sizes) == 2
        for first in itertools.combinations(range(n), sizes[0]):
            rest = [i for i in range(n) if i not in first]
            f = one_way_f(values[list(first) + rest], sizes)
            total += 1
            count += f >= f_obs * (1 - 1e-10)
        out.append({"levels": [d.levels[f][l] for f, l in zip(at, combo)], "F": f_obs, "count": count, "total": total})
    return {"effect": [d.factors[f] for f in effect], "at": [d.factors[f] for f in at], "slices": out,
            "call": "itertools.combinations: every assignment of the slice's values to its two cells"}


def mc_slices(d, effect, at, B, seed):
    """numpy restricted permutation (within strata of the averaged factors) of the slice-error F."""
    rng = np.random.default_rng(seed)
    others = [f for f in range(d.k) if f not in effect and f not in at]
    out = []
    for combo in itertools.product(*[range(d.shape[f]) for f in at]):
        L = d.slice_blocks(effect, at, list(combo))
        in_slice = [c for c in range(d.C) if d.in_slice(c, at, list(combo))]
        strata = {}
        for c in in_slice:
            key = tuple(d.combos[c][f] for f in others)
            strata.setdefault(key, []).append(c)
        cell_idx = {c: np.flatnonzero(d.cell == c) for c in in_slice}

        def stat(y):
            mu = np.zeros(d.C)
            n = np.ones(d.C)
            sse = 0.0
            for c in in_slice:
                v = y[cell_idx[c]]
                mu[c] = v.mean()
                n[c] = len(v)
                sse += ((v - v.mean()) ** 2).sum()
            cols = in_slice
            Lm = L[:, cols]
            lm = Lm @ mu[cols]
            ss = float(lm @ np.linalg.solve(Lm @ np.diag(1 / n[cols]) @ Lm.T, lm))
            df = sum(len(cell_idx[c]) for c in cols) - len(cols)
            return (ss / L.shape[0]) / (sse / df)

        f_obs = stat(d.y)
        y = d.y.copy()
        b = 0
        for _ in range(B):
            for cs in strata.values():
                idx = np.concatenate([cell_idx[c] for c in cs])
                y[idx] = d.y[idx][rng.permutation(len(idx))]
            b += stat(y) >= f_obs * (1 - 1e-10)
        p = (1 + b) / (1 + B)
        out.append({"levels": [d.levels[f][l] for f, l in zip(at, combo)], "F": f_obs, "p": p,
                    "se": math.sqrt((b / B) * (1 - b / B) / B), "resamples": B})
    return {"effect": [d.factors[f] for f in effect], "at": [d.factors[f] for f in at], "slices": out,
            "call": f"numpy default_rng({seed}).permutation within strata, B = {B}"}


SPECS = {
    "methods12": {"simple": [([0], [1]), ([1], [0])], "pairwise": [([0], [1]), ([1], [0]), ([1], [])],
                  "contrasts": [(1, [1.0, -0.5, -0.5]), (0, [1.0, -1.0])]},
    "toothgrowth": {"simple": [([0], [1]), ([1], [0])], "pairwise": [([1], [0]), ([1], [])],
                    "contrasts": [(1, [2.0, -1.0, -1.0]), (0, [1.0, -1.0])], "trend": 1},
    "warpbreaks": {"simple": [([1], [0])], "pairwise": [([1], [0]), ([1], [])],
                   "contrasts": [(1, [1.0, 0.0, -1.0])]},
    "penguins": {"simple": [([0], [1]), ([1], [0])], "pairwise": [([0], [1]), ([0], [])],
                 "contrasts": [(0, [1.0, -0.5, -0.5])]},
    "threeway": {"simple": [([0], [2]), ([1], [2]), ([0], [1, 2]), ([0, 1], [2])],
                 "pairwise": [([1], [2]), ([1], [0, 2]), ([1], [])],
                 "contrasts": [(1, [1.0, -1.0, 0.0])]},
}


def generate():
    out = {"multiplicity": multiplicity(), "nct": nct_records()}
    for name, spec in SPECS.items():
        _, outcome, factors, csv = ds.ALL[name]()
        d = Data(csv, outcome, factors)
        rows, levels = rk.read(csv, outcome, factors)
        rd = rk.Design(rows, levels, factors)
        assert rd.levels == d.levels, (rd.levels, d.levels)
        rec = d.entry()
        rec["simple"] = [simple(d, e, a) for e, a in spec["simple"]]
        rec["all_cells"] = all_cells(d)
        rec["pairwise"] = [pairwise(d, rd, e, a) for e, a in spec["pairwise"]]
        rec["contrasts"] = [contrast(d, f, w) for f, w in spec["contrasts"]]
        if "trend" in spec:
            f = spec["trend"]
            x = [float(v) for v in d.levels[f]]
            rec["trend"] = {"factor": factors[f], "weights": trend_weights(x),
                            "tests": [contrast(d, f, w) for w in trend_weights(x)],
                            "call": "numpy.linalg.qr(vander(x − mean)); t_test as for contrasts"}
        out[name] = rec
    m12 = Data("methods12.csv", "y", ["A", "B"])
    out["permutation"] = {
        "exact": {"dataset": m12.entry(), **exact_slices(m12, [0], [1])},
        "monte_carlo": [
            {"dataset": Data("toothgrowth.csv", "len", ["supp", "dose"]).entry(),
             **mc_slices(Data("toothgrowth.csv", "len", ["supp", "dose"]), [0], [1], 40000, 11)},
            {"dataset": Data("threeway.csv", "y", ["A", "B", "C"]).entry(),
             **mc_slices(Data("threeway.csv", "y", ["A", "B", "C"]), [0], [2], 40000, 12)},
        ],
    }
    return out
