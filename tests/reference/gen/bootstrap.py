"""Reference values for the `bootstrap` engine (METHODS §8, §10).

Library calls (recorded in each record's `call`):
* Intervals: scipy `stats.bootstrap(samples, statistic, n_resamples=0,
  bootstrap_result=<object with bootstrap_distribution = θ*>, method='BCa'|'percentile',
  confidence_level=0.95)`: scipy's own z0, stratified (multi-sample) jackknife
  acceleration and type-7 quantiles applied to the θ* of quorum's resamples. The
  resamples are reproduced here from quorum's documented streams (METHODS §10.2–10.3:
  SplitMix64 key mixing, PCG64 via numpy's `PCG64` raw state with `rand_pcg`'s extra
  seeding step, Lemire bounded integers), so quorum must match scipy to rounding.
* Independent draws: scipy `stats.bootstrap(..., n_resamples=100_000, rng=seed)` over
  many seeds; the spread of the ends over seeds is the Monte Carlo SE of an end.
* Coverage: for samples of n = 30 from exponential and lognormal distributions (drawn
  from quorum's auxiliary streams by inverse cdf), whether scipy's 95% percentile and
  BCa intervals (n_resamples = 1999, its own draws) cover the true mean.
* Wild bootstrap (METHODS §8.6): statsmodels `ols(...).fit()` of the sum-coded model
  without a term's columns gives the restricted fit; y* = fitted + residual × v with
  quorum's Rademacher or Mammen weights; F* from an observation-level numpy HC3
  sandwich (checked against statsmodels `OLS(y*, X).fit(cov_type='HC3')
  .wald_test(R, use_f=True, scalar=True)` on the first resamples), then the
  exceedance count #{F* ≥ F(1 − 1e-10)}.
* Mammen weight moments in 50-digit arithmetic (mpmath).
"""
import itertools
import math

import mpmath
import numpy as np
import pandas as pd
import patsy
import scipy.stats as st
import statsmodels.api as sm
from scipy.special import ndtri

from gen import _datasets as ds

SEED = 20240611
CHUNK = 256
M64 = (1 << 64) - 1
GOLD = 0x9E3779B97F4A7C15
GAMMA = 0.2

# --------------------------------------------------------------------------- streams


def _fin(z):
    z = ((z ^ (z >> 30)) * 0xBF58476D1CE4E5B9) & M64
    z = ((z ^ (z >> 27)) * 0x94D049BB133111EB) & M64
    return z ^ (z >> 31)


def _state(seed, key):
    h = seed
    for w in key:
        h = _fin(((h ^ w) + GOLD) & M64)
    x, o = h, []
    for _ in range(4):
        x = (x + GOLD) & M64
        o.append(_fin(x))
    return (o[0] << 64) | o[1], ((o[2] << 64) | o[3]) | 1


class Stream:
    """quorum's stream of `key` (METHODS §10.1 implementation (b)): numpy PCG64 started
    at state + inc, one step discarded (what `rand_pcg`'s `from_seed` does)."""

    def __init__(self, seed, key):
        state, inc = _state(seed, key)
        self.bg = np.random.PCG64()
        self.bg.state = {"bit_generator": "PCG64", "state": {"state": (state + inc) % (1 << 128), "inc": inc},
                         "has_uint32": 0, "uinteger": 0}
        self.bg.random_raw()
        self.buf, self.pos = [], 0

    def next(self):
        if self.pos == len(self.buf):
            self.buf, self.pos = [int(v) for v in self.bg.random_raw(4096)], 0
        self.pos += 1
        return self.buf[self.pos - 1]

    def bounded(self, s):
        """Lemire (2019) nearly divisionless bounded integer in [0, s)."""
        x = self.next()
        m = x * s
        low = m & M64
        if low < s:
            t = ((1 << 64) - s) % s
            while low < t:
                x = self.next()
                m = x * s
                low = m & M64
        return m >> 64

    def uniform(self):
        return (self.next() >> 11) * 2.0 ** -53


def _check_streams():
    # METHODS §10.3 vectors (seed 42): implementation (b), key (1,0,0,0); bounded(7) of (2,5,3,0)
    # on implementation (a) is checked in Rust; here the (b) first outputs.
    s = Stream(42, (1, 0, 0, 0))
    assert s.next() == 0x955941F8F80BC037 and s.next() == 0x725177015AB72A94


def stratified_indices(sizes, resamples, seed=SEED):
    """Index arrays idx[c] (resamples × n_c) of quorum's stratified bootstrap (key (2, 0, chunk, 0))."""
    idx = [np.zeros((resamples, n), dtype=np.int64) for n in sizes]
    stream = None
    for b in range(resamples):
        if b % CHUNK == 0:
            stream = Stream(seed, (2, 0, b // CHUNK, 0))
        for c, n in enumerate(sizes):
            for i in range(n):
                idx[c][b, i] = stream.bounded(n)
    return idx


def wild_weights(n_obs, resamples, kind, seed=SEED):
    """Weights v (resamples × N) of quorum's wild bootstrap (key (3, 0, chunk, 0))."""
    v = np.zeros((resamples, n_obs))
    s5 = math.sqrt(5.0)
    low, high, p_low = -(s5 - 1) / 2, (s5 + 1) / 2, (s5 + 1) / (2 * s5)
    stream = None
    for b in range(resamples):
        if b % CHUNK == 0:
            stream = Stream(seed, (3, 0, b // CHUNK, 0))
        if kind == "rademacher":
            word = 0
            for i in range(n_obs):
                if i % 64 == 0:
                    word = stream.next()
                v[b, i] = 1.0 if (word >> (i % 64)) & 1 else -1.0
        else:
            for i in range(n_obs):
                v[b, i] = low if stream.uniform() < p_low else high
    return v


# ----------------------------------------------------------------- statistics (numpy)
# Every statistic takes the cells as arrays whose last axis holds the observations and
# works on any leading batch shape (scipy's vectorized convention, axis=-1).


def h_matrix(a):
    return np.hstack([np.eye(a - 1), -np.ones((a - 1, 1))])


def helmert(a):
    """Helmert contrasts (rows orthogonal to 1): a different basis from quorum's [I | −1]."""
    return np.array([[1.0] * j + [-float(j)] + [0.0] * (a - j - 1) for j in range(1, a)])


def term_l(shape, term, basis=helmert):
    blocks = [basis(a) if f in term else np.ones((1, a)) for f, a in enumerate(shape)]
    out = blocks[0]
    for b in blocks[1:]:
        out = np.kron(out, b)
    return out


def means(cells):
    return np.stack([c.mean(axis=-1) for c in cells], axis=-1)


def trimmed(x):
    return st.trim_mean(x, GAMMA, axis=-1)


def winsorized_var(x):
    n = x.shape[-1]
    g = int(math.floor(GAMMA * n))
    s = np.sort(x, axis=-1)
    lo, hi = s[..., g:g + 1], s[..., n - g - 1:n - g]
    return np.clip(x, lo, hi).var(axis=-1, ddof=1)


def c_gamma(gamma):
    z = ndtri(1 - gamma)
    return math.sqrt((1 - 2 * gamma) - 2 * z * st.norm.pdf(z) + 2 * gamma * z * z)


def type3_ss(cells, shape, term):
    """SS_S = (Lμ)'(L D⁻¹ L')⁻¹(Lμ) with Helmert L, batched."""
    L = term_l(shape, term)
    n = np.array([c.shape[-1] for c in cells], dtype=float)
    mu = means(cells)
    lm = mu @ L.T
    M = (L / n) @ L.T
    return np.einsum("...i,ij,...j->...", lm, np.linalg.inv(M), lm)


def sse(cells):
    return sum(((c - c.mean(axis=-1, keepdims=True)) ** 2).sum(axis=-1) for c in cells)


def partial_eta(shape, term):
    def stat(*cells, axis=-1):
        ss = type3_ss(cells, shape, term)
        return ss / (ss + sse(cells))
    return stat


def partial_omega(shape, term):
    q = int(np.prod([shape[f] - 1 for f in term]))

    def stat(*cells, axis=-1):
        ss = type3_ss(cells, shape, term)
        n = sum(c.shape[-1] for c in cells)
        mse = sse(cells) / (n - len(cells))
        return (ss - q * mse) / (ss + (n - q) * mse)
    return stat


def robust_d(shape, term):
    """AKP d of a 1-df term: ℓ (quorum's H = [I | −1] row) rescaled so its positive part sums to 1."""
    ell = term_l(shape, term, basis=h_matrix)[0]
    ell = ell / ell[ell > 0].sum()

    def stat(*cells, axis=-1):
        psi = sum(w * trimmed(c) for w, c in zip(ell, cells))
        n = sum(c.shape[-1] for c in cells)
        pooled = sum((c.shape[-1] - 1) * winsorized_var(c) for c in cells) / (n - len(cells))
        return c_gamma(GAMMA) * psi / np.sqrt(pooled)
    return stat


def linear(weights):
    def stat(*cells, axis=-1):
        return sum(w * c.mean(axis=-1) for w, c in zip(weights, cells) if w != 0.0)
    return stat


def weighted(mask):
    def stat(*cells, axis=-1):
        tot = sum(c.sum(axis=-1) for m, c in zip(mask, cells) if m)
        return tot / sum(c.shape[-1] for m, c in zip(mask, cells) if m)
    return stat


def one_cell(c, fn):
    def stat(*cells, axis=-1):
        return fn(cells[c])
    return stat


class _Result:
    def __init__(self, dist):
        self.bootstrap_distribution = dist


def scipy_intervals(cells, stat, theta):
    out = {}
    for method in ("percentile", "BCa"):
        r = st.bootstrap(tuple(cells), stat, n_resamples=0, bootstrap_result=_Result(theta), method=method,
                         confidence_level=0.95, vectorized=True)
        out[method] = [float(r.confidence_interval.low), float(r.confidence_interval.high)]
    return out


def exact_record(factors, shape, levels, cells, specs, resamples=1999):
    sizes = [len(c) for c in cells]
    idx = stratified_indices(sizes, resamples)
    arrays = [np.asarray(c, dtype=float) for c in cells]
    resampled = [a[i] for a, i in zip(arrays, idx)]
    rows = []
    for family, label, stat in specs:
        theta = stat(*resampled, axis=-1)
        iv = scipy_intervals(arrays, stat, theta)
        rows.append({"family": family, "label": label, "estimate": float(stat(*arrays, axis=-1)),
                     "se": float(np.std(theta, ddof=1)), "percentile": iv["percentile"], "bca": iv["BCa"]})
    return {"factors": factors, "shape": shape, "levels": levels, "cells": [list(map(float, c)) for c in cells],
            "resamples": resamples, "seed": SEED, "ci_level": 0.95, "trim": GAMMA, "rows": rows,
            "call": "scipy.stats.bootstrap(cells, statistic, n_resamples=0, bootstrap_result=θ* of quorum's "
                    "stratified resamples, method='percentile'|'BCa', confidence_level=0.95, vectorized=True)"}


def exact_intervals():
    out = {}
    # Continuous invented data (full double precision), so that no resampled statistic
    # ties the estimate in exact arithmetic: with rounded data (e.g. one decimal) such
    # ties are common and floating-point summation order alone would decide them.
    rng = np.random.default_rng(7)
    x0 = rng.lognormal(0.0, 0.8, 20)
    x1 = rng.lognormal(0.3, 0.6, 15)
    specs = [
        ("cell_mean", "G=g1", one_cell(0, lambda x: x.mean(axis=-1))),
        ("cell_trimmed_mean", "G=g2", one_cell(1, trimmed)),
        ("level_difference", "G: g1 − g2", linear([1.0, -1.0])),
        ("partial_eta_squared", "G", partial_eta([2], (0,))),
        ("robust_d", "G", robust_d([2], (0,))),
    ]
    out["two_cells"] = exact_record(["G"], [2], [["g1", "g2"]], [x0, x1], specs)
    # An invented unbalanced 2×3 design with skewed cells of unequal spread.
    rng = np.random.default_rng(2024)
    sizes = [5, 7, 6, 8, 6, 7]
    scales = [0.5, 1.0, 1.5, 0.7, 2.0, 2.5]
    shifts = [10.0, 10.5, 13.0, 10.0, 12.0, 15.0]
    cells = [s + rng.gamma(2.0, sc, n) for n, sc, s in zip(sizes, scales, shifts)]
    levels = [["a1", "a2"], ["b1", "b2", "b3"]]
    shape = [2, 3]
    specs = [
        ("cell_mean", "A=a2, B=b1", one_cell(3, lambda x: x.mean(axis=-1))),
        ("cell_trimmed_mean", "A=a1, B=b3", one_cell(2, trimmed)),
        ("marginal_mean_unweighted", "A=a1", linear([1 / 3, 1 / 3, 1 / 3, 0, 0, 0])),
        ("marginal_mean_weighted", "B=b1", weighted([1, 0, 0, 1, 0, 0])),
        ("level_difference", "B: b1 − b3", linear([0.5, 0, -0.5, 0.5, 0, -0.5])),
        ("interaction_contrast", "(a1 − a2) × (b1 − b2)", linear([1, -1, 0, -1, 1, 0])),
        ("partial_eta_squared", "A:B", partial_eta(shape, (0, 1))),
        ("partial_eta_squared", "B", partial_eta(shape, (1,))),
        ("partial_omega_squared", "A", partial_omega(shape, (0,))),
        ("robust_d", "A", robust_d(shape, (0,))),
    ]
    out["skewed_2x3"] = exact_record(["A", "B"], shape, levels, cells, specs)
    return out


def independent_draws():
    """scipy's own resampling, B = 100 000, repeated over seeds."""
    rng = np.random.default_rng(11)
    x0 = rng.lognormal(0.0, 0.7, 25)
    x1 = rng.normal(5.0, 1.0, 20)
    seeds = 100
    rows = []
    for family, label, fn in [("cell_mean", "G=g1", lambda x, axis=-1: np.mean(x, axis=axis)),
                              ("cell_trimmed_mean", "G=g1", lambda x, axis=-1: st.trim_mean(x, GAMMA, axis=axis))]:
        rec = {"family": family, "label": label}
        for method in ("percentile", "BCa"):
            ends = np.array([[float(v) for v in st.bootstrap((x0,), fn, n_resamples=100_000, method=method,
                                                              confidence_level=0.95, vectorized=True,
                                                              rng=np.random.default_rng(1000 + s)).confidence_interval]
                             for s in range(seeds)])
            rec[method] = {"mean": ends.mean(axis=0).tolist(), "sd": ends.std(axis=0, ddof=1).tolist()}
        rows.append(rec)
    return {"factors": ["G"], "levels": [["g1", "g2"]], "cells": [x0.tolist(), x1.tolist()], "resamples": 100_000, "seeds": seeds,
            "rows": rows,
            "call": "scipy.stats.bootstrap((x,), statistic, n_resamples=100_000, method=…, confidence_level=0.95, "
                    "vectorized=True, rng=default_rng(1000 + s)) for s in range(100): mean and sd of each end"}


def coverage_samples(dist, count=2000, n=30, seed=SEED):
    """Samples j = 0..count−1 from quorum's stream (6, 0, j, aux) by inverse cdf of
    u = ((raw >> 11) + 0.5)·2⁻⁵³: exponential −ln u (aux 1), lognormal exp(Φ⁻¹(u)) (aux 2)."""
    aux = {"exponential": 1, "lognormal": 2}[dist]
    out = []
    for j in range(count):
        s = Stream(seed, (6, 0, j, aux))
        u = np.array([((s.next() >> 11) + 0.5) * 2.0 ** -53 for _ in range(n)])
        out.append(-np.log(u) if dist == "exponential" else np.exp(ndtri(u)))
    return out


def coverage():
    out = {}
    for dist, truth in (("exponential", 1.0), ("lognormal", math.exp(0.5))):
        samples = coverage_samples(dist)
        rec = {"truth": truth, "count": len(samples), "n": 30, "sample_means": [float(x.mean()) for x in samples]}
        for method in ("percentile", "BCa"):
            hits = []
            for j, x in enumerate(samples):
                ci = st.bootstrap((x,), np.mean, n_resamples=1999, method=method, confidence_level=0.95,
                                  rng=np.random.default_rng(j)).confidence_interval
                hits.append("1" if ci.low <= truth <= ci.high else "0")
            rec[method] = "".join(hits)
        out[dist] = rec
    out["call"] = ("scipy.stats.bootstrap((x,), np.mean, n_resamples=1999, method='percentile'|'BCa', "
                   "confidence_level=0.95, rng=default_rng(j)): 1 where the interval covers the true mean")
    return out


# ----------------------------------------------------------------------- wild bootstrap


def hc3_f_batch(X, ystar, R):
    """Observation-level HC3 Wald F of Rβ = 0 for each row of ystar (numpy sandwich)."""
    xtx_inv = np.linalg.inv(X.T @ X)
    h = np.einsum("ij,jk,ik->i", X, xtx_inv, X)
    beta = ystar @ (X @ xtx_inv)            # B × p
    resid = ystar - beta @ X.T              # B × N
    w = resid ** 2 / (1 - h) ** 2
    bread = xtx_inv @ X.T                   # p × N
    cov = np.einsum("pn,bn,qn->bpq", bread, w, bread)
    rb = beta @ R.T
    rcr = R @ cov @ R.T
    q = R.shape[0]
    return np.einsum("bi,bij,bj->b", rb, np.linalg.inv(rcr), rb) / q


def wild_record(name, resamples, weights_kind):
    df, outcome, factors, csv = ds.ALL[name]()
    src = ds.complete(df, outcome, factors)
    levels = [sorted(src[f].unique()) for f in factors]
    d = pd.DataFrame({"yy": src[outcome].astype(float).to_numpy()})
    for i, f in enumerate(factors):
        d[f"f{i}"] = pd.Categorical(src[f].to_numpy(), categories=levels[i])
    # Canonical order: sorted by cell (last factor fastest), input order within a cell.
    d["cell"] = 0
    for i, lv in enumerate(levels):
        d["cell"] = d["cell"] * len(lv) + d[f"f{i}"].cat.codes.astype(int)
    d = d.sort_values("cell", kind="stable").reset_index(drop=True)
    rhs = " * ".join(f"C(f{i}, Sum)" for i in range(len(factors)))
    y, X = patsy.dmatrices(f"yy ~ {rhs}", d, return_type="dataframe")
    cols = list(X.columns)
    yv, Xv = y["yy"].to_numpy(), X.to_numpy()
    v = wild_weights(len(yv), resamples, weights_kind)
    terms = [s for r in range(1, len(factors) + 1) for s in itertools.combinations(range(len(factors)), r)]
    out_terms = []
    for term in terms:
        tname = ":".join(factors[f] for f in term)
        # Columns of the term: interaction columns name exactly the term's factors.
        sel = [j for j, c in enumerate(cols)
               if c != "Intercept" and sorted(int(p.split(",")[0][3:]) for p in c.split(":")) == list(term)]
        R = np.zeros((len(sel), len(cols)))
        for r, j in enumerate(sel):
            R[r, j] = 1.0
        full = sm.OLS(yv, Xv).fit(cov_type="HC3")
        f_obs = float(full.wald_test(R, use_f=True, scalar=True).statistic)
        keep = [j for j in range(len(cols)) if j not in sel]
        restricted = sm.OLS(yv, Xv[:, keep]).fit()
        fitted, resid = restricted.fittedvalues, restricted.resid
        ystar = fitted[None, :] + resid[None, :] * v
        f_star = hc3_f_batch(Xv, ystar, R)
        for b in range(10):  # the numpy sandwich against statsmodels itself
            sm_f = float(sm.OLS(ystar[b], Xv).fit(cov_type="HC3").wald_test(R, use_f=True, scalar=True).statistic)
            assert abs(sm_f - f_star[b]) <= 1e-9 * abs(sm_f), (name, tname, b)
        cell_fitted = [float(fitted[d["cell"].to_numpy() == c][0]) for c in range(int(np.prod([len(lv) for lv in levels])))]
        exceed = int(np.sum(f_star >= f_obs * (1 - 1e-10)))
        out_terms.append({"term": tname, "F": f_obs, "restricted_cell_means": cell_fitted,
                          "F_star_first": f_star[:40].tolist(), "exceedances": exceed,
                          "p": (1 + exceed) / (1 + resamples)})
    return {"csv": f"tests/data/{csv}", "outcome": outcome, "factors": factors, "weights": weights_kind,
            "resamples": resamples, "seed": SEED, "terms": out_terms,
            "call": "statsmodels OLS(y, X without the term).fit() restricted fit; y* = fitted + resid·v with "
                    "quorum's weights; F* by the numpy HC3 sandwich, checked against "
                    "OLS(y*, X).fit(cov_type='HC3').wald_test(R, use_f=True, scalar=True)"}


def mammen_moments():
    mpmath.mp.dps = 50
    s5 = mpmath.sqrt(5)
    low, high, p = -(s5 - 1) / 2, (s5 + 1) / 2, (s5 + 1) / (2 * s5)
    m = [p * low ** k + (1 - p) * high ** k for k in (1, 2, 3)]
    return {"values": [float(low), float(high)], "p_low": float(p), "moments": [float(x) for x in m],
            "call": "mpmath (50 digits): E v^k = p·low^k + (1 − p)·high^k, k = 1, 2, 3"}


def generate():
    _check_streams()
    return {
        "exact": exact_intervals(),
        "independent": independent_draws(),
        "coverage": coverage(),
        "wild": {
            "methods12_rademacher": wild_record("methods12", 1999, "rademacher"),
            "warpbreaks_rademacher": wild_record("warpbreaks", 1999, "rademacher"),
            "methods12_mammen": wild_record("methods12", 999, "mammen"),
        },
        "mammen": mammen_moments(),
    }
