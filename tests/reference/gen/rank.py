"""Rank-based engines: aligned rank transform (ART), ART-C contrasts, the rank ATS, and the
one-factor rank test against Kruskal-Wallis.

Everything here is written independently of the Rust code, from METHODS §5-§6 and the papers:

* ART (Wobbrock, Findlater, Gergle & Higgins 2011) with the METHODS Overrides-5 alignment:
  inclusion-exclusion on UNWEIGHTED marginal means of the cell means, computed in exact
  rational arithmetic (`fractions.Fraction` on the CSV text), so exact ties among aligned
  responses stay exact; then `scipy.stats.rankdata(method='average')` and statsmodels
  `anova_lm(ols('r ~ C(f0, Sum) * C(f1, Sum) ...').fit(), typ=3)` on the ranks.
  The observation-weighted alignment of METHODS §5.1 (which §12.5's values use) is computed
  too (pandas group means, floats), to document where the two differ.
* ART-C (Elkin, Kay, Higgins & Wobbrock 2021; METHODS §5.3): alignment for the whole marginal
  effect of a factor set (exact), rankdata, statsmodels `ols('r ~ 0 + C(cell)').fit().t_test(L)`
  for each contrast, `statsmodels.stats.multitest.multipletests(method='holm')`.
* Rank ATS (Brunner, Dette & Munk 1997; METHODS §6.2): dense numpy matrices straight from the
  formulas (T = L'(LL')^-1 L with `numpy.linalg.pinv`, V, D_T, Lambda), mid-ranks from
  rankdata, pseudo-ranks from their definition with explicit counts (Brunner, Konietschke,
  Pauly & Puri 2017), p from `scipy.stats.f.sf`.
* One factor: `scipy.stats.kruskal(*groups)` (tie-corrected H) and the rank-transform F,
  F = [H/(C-1)] / [(N-1-H)/(N-C)] (METHODS §5.4), also from statsmodels on rankdata.

Invented data: `likert7.csv`, a 3 x 2 design of 7-point ratings (numpy, fixed seed), written
here because no shared dataset has few distinct values; exact ties of aligned responses across
cells are common in such data, which checks quorum's tie handling of computed values.
"""
import csv
import itertools
import math
from fractions import Fraction

import numpy as np
import pandas as pd
import scipy.stats as st
import statsmodels.formula.api as smf
from statsmodels.stats.anova import anova_lm
from statsmodels.stats.multitest import multipletests

from gen import _datasets as ds

MISSING = {"NA", "", ".", "NaN"}


# ----------------------------------------------------------------------------- data

def likert7():
    """Invented 3 x 2 design, 7-point ratings, unbalanced (n 5..8), ceiling in one cell."""
    rng = np.random.default_rng(271828)
    rows = []
    sizes = {("g1", "off"): 6, ("g1", "on"): 7, ("g2", "off"): 5, ("g2", "on"): 8, ("g3", "off"): 6, ("g3", "on"): 7}
    shift = {("g1", "off"): 0.0, ("g1", "on"): 0.6, ("g2", "off"): 0.4, ("g2", "on"): 1.6, ("g3", "off"): 1.0,
             ("g3", "on"): 1.4}
    for key, n in sizes.items():
        for _ in range(n):
            latent = 3.6 + shift[key] + rng.normal(0.0, 1.3)
            rows.append((key[0], key[1], int(min(7, max(1, round(latent))))))
    df = pd.DataFrame(rows, columns=["group", "cue", "rating"])
    return df, "rating", ["group", "cue"], "likert7.csv"


def datasets():
    out = {}
    for name, loader in ds.ALL.items():
        df, outcome, factors, csvname = loader()
        out[name] = (outcome, factors, csvname)
    df, outcome, factors, csvname = likert7()
    ds.write_csv(df, csvname)
    out["likert7"] = (outcome, factors, csvname)
    return out


def level_order(labels):
    """quorum's rule: numeric order when every label is a number, else code-point order."""
    try:
        return sorted(labels, key=float)
    except ValueError:
        return sorted(labels)


def read(csvname, outcome, factors):
    """Rows with outcome and every factor present, as (level labels, exact value, text)."""
    rows = []
    with open(ds.DATA / csvname, newline="", encoding="utf-8") as fh:
        for rec in csv.DictReader(fh):
            vals = [rec[outcome].strip()] + [rec[f].strip() for f in factors]
            if any(v in MISSING for v in vals):
                continue
            rows.append((tuple(rec[f] for f in factors), Fraction(rec[outcome].strip())))
    levels = [level_order(sorted({r[0][i] for r in rows})) for i in range(len(factors))]
    return rows, levels


class Design:
    def __init__(self, rows, levels, names):
        self.levels = levels
        self.names = names
        self.shape = [len(l) for l in levels]
        self.k = len(levels)
        self.cells = list(itertools.product(*[range(a) for a in self.shape]))  # row-major
        index = {c: i for i, c in enumerate(self.cells)}
        self.y = [r[1] for r in rows]
        self.cell = [index[tuple(levels[f].index(r[0][f]) for f in range(self.k))] for r in rows]
        self.n = len(rows)
        self.C = len(self.cells)
        self.cell_n = [self.cell.count(c) for c in range(self.C)]
        self.means = [sum(y for y, c in zip(self.y, self.cell) if c == cc) / self.cell_n[cc] for cc in range(self.C)]
        self.terms = sorted([list(s) for r in range(1, self.k + 1) for s in itertools.combinations(range(self.k), r)],
                            key=lambda s: (len(s), s))

    def term_name(self, s):
        return ":".join(self.names[f] for f in s)

    def frame(self, response):
        d = pd.DataFrame({"r": np.asarray(response, dtype=float)})
        for f in range(self.k):
            d[f"f{f}"] = [self.levels[f][self.cells[c][f]] for c in self.cell]
        d["cell"] = self.cell
        return d

    def formula(self):
        return "r ~ " + " * ".join(f"C(f{f}, Sum)" for f in range(self.k))


def unweighted_marginal(d, subset):
    """U_T(c): average of the cell means over the cells sharing c's levels on T (exact)."""
    out = []
    for c in d.cells:
        same = [j for j, cc in enumerate(d.cells) if all(cc[f] == c[f] for f in subset)]
        out.append(sum(d.means[j] for j in same) / len(same))
    return out


def effect_estimate(d, s):
    """Inclusion-exclusion: sum over T subset of S of (-1)^{|S|-|T|} U_T (Overrides 5)."""
    total = [Fraction(0)] * d.C
    for r in range(len(s) + 1):
        for t in itertools.combinations(s, r):
            u = unweighted_marginal(d, t)
            sign = (-1) ** (len(s) - r)
            total = [a + sign * b for a, b in zip(total, u)]
    return total


def align(d, per_cell):
    return [y - d.means[c] + per_cell[c] for y, c in zip(d.y, d.cell)]


def anova3(d, response):
    fit = smf.ols(d.formula(), data=d.frame(response)).fit()
    table = anova_lm(fit, typ=3)
    rows = {}
    for label, r in table.iterrows():
        if label in ("Intercept", "Residual"):
            continue
        s = [int(p.split(",")[0][3:]) for p in label.split(":")]
        rows[d.term_name(s)] = (float(r["sum_sq"]), float(r["df"]), float(r["F"]), float(r["PR(>F)"]))
    return rows, float(fit.ssr), float(fit.df_resid)


# ----------------------------------------------------------------------------- ART

def art(d):
    out = []
    for s in d.terms:
        name = d.term_name(s)
        aligned = align(d, effect_estimate(d, s))
        ranks = st.rankdata([float(v) for v in aligned], method="average")
        rows, sse, dfe = anova3(d, ranks)
        ss, df1, f, p = rows[name]
        unranked, _, _ = anova3(d, [float(v) for v in aligned])
        others = max((abs(v[2]) for k, v in unranked.items() if k != name), default=0.0)
        out.append({"term": name, "ss": ss, "sse": sse, "df1": df1, "df2": dfe, "F": f, "p": p,
                    "partial_eta_sq": ss / (ss + sse), "exact_aligned_sum": float(sum(aligned)),
                    "distinct_aligned": len(set(aligned)), "max_other_F_unranked": others})
    return out


def art_observation_weighted(d, frame):
    """METHODS §5.1 as printed: observation-weighted marginal means M_T (means of all
    observations sharing the levels on T). Computed twice: in floats with pandas group means
    (how §12.5's values were made; rounding can split exact ties of aligned responses) and
    in exact rationals (ties kept), which is what must equal the Overrides-5 alignment in
    balanced designs."""
    y = frame["r"].to_numpy()
    out = []
    for s in d.terms:
        cellmean = frame.groupby("cell")["r"].transform("mean").to_numpy()
        e = np.zeros(d.n)
        exact = [Fraction(0)] * d.n
        for r in range(len(s) + 1):
            for t in itertools.combinations(s, r):
                m = frame.groupby([f"f{f}" for f in t])["r"].transform("mean").to_numpy() if t else np.full(d.n, y.mean())
                e += (-1) ** (len(s) - r) * m
                key = [tuple(d.cells[c][f] for f in t) for c in d.cell]
                groups = {}
                for kk, yy in zip(key, d.y):
                    groups.setdefault(kk, []).append(yy)
                mexact = {kk: sum(v) / len(v) for kk, v in groups.items()}
                exact = [a + (-1) ** (len(s) - r) * mexact[kk] for a, kk in zip(exact, key)]
        aligned = y - cellmean + e
        ranks = st.rankdata(aligned, method="average")
        rows, _, _ = anova3(d, ranks)
        ss, df1, f, p = rows[d.term_name(s)]
        aligned_exact = [yy - d.means[c] + ee for yy, c, ee in zip(d.y, d.cell, exact)]
        rows_x, _, _ = anova3(d, st.rankdata([float(v) for v in aligned_exact], method="average"))
        out.append({"term": d.term_name(s), "F_float": f, "p_float": p,
                    "F_exact": rows_x[d.term_name(s)][2], "p_exact": rows_x[d.term_name(s)][3]})
    return out


# ----------------------------------------------------------------------------- ART-C

def contrast_rows(d, kind, s):
    """(levels description, coefficient over cells) in quorum's documented order."""
    other = [f for f in range(d.k) if f not in s]
    m = int(np.prod([d.shape[f] for f in other])) if other else 1
    specs = []
    if kind == "pairwise":
        combos = list(itertools.product(*[range(d.shape[f]) for f in s]))
        for j in range(len(combos)):
            for k in range(j + 1, len(combos)):
                specs.append([(f, combos[j][i], combos[k][i]) for i, f in enumerate(s)])
    else:
        per = [[(i, j) for i in range(d.shape[f]) for j in range(i + 1, d.shape[f])] for f in s]
        for choice in itertools.product(*per):
            specs.append([(f, choice[i][0], choice[i][1]) for i, f in enumerate(s)])
    out = []
    for spec in specs:
        coef = np.zeros(d.C)
        for c, lv in enumerate(d.cells):
            if kind == "pairwise":
                if all(lv[f] == i for f, i, _ in spec):
                    coef[c] = 1.0 / m
                elif all(lv[f] == j for f, _, j in spec):
                    coef[c] = -1.0 / m
            else:
                w = 1.0 / m
                for f, i, j in spec:
                    w *= 1.0 if lv[f] == i else (-1.0 if lv[f] == j else 0.0)
                coef[c] = w
        levels = [[d.names[f], d.levels[f][i], d.levels[f][j]] for f, i, j in spec]
        out.append((levels, coef))
    return out


def artc(d, kind, s):
    if kind == "pairwise":
        u_s, u_0 = unweighted_marginal(d, s), unweighted_marginal(d, ())
        aligned = align(d, [a - b for a, b in zip(u_s, u_0)])
    else:
        aligned = align(d, effect_estimate(d, s))
    ranks = st.rankdata([float(v) for v in aligned], method="average")
    frame = d.frame(ranks)
    fit = smf.ols("r ~ 0 + C(cell)", data=frame).fit()
    rows = contrast_rows(d, kind, s)
    res = []
    for levels, coef in rows:
        tt = fit.t_test(coef.reshape(1, -1))
        res.append({"levels": levels, "estimate": float(np.asarray(tt.effect).ravel()[0]),
                    "se": float(np.asarray(tt.sd).ravel()[0]), "t": float(np.asarray(tt.tvalue).ravel()[0]),
                    "p": float(np.asarray(tt.pvalue).ravel()[0])})
    holm = multipletests([r["p"] for r in res], method="holm")[1]
    for r, h in zip(res, holm):
        r["p_holm"] = float(h)
    return {"factors": [d.names[f] for f in s], "kind": kind, "mse": float(fit.mse_resid),
            "df": float(fit.df_resid), "contrasts": res,
            "call": "ols('r ~ 0 + C(cell)', ranks).fit().t_test(L); multipletests(p, method='holm')"}


# ----------------------------------------------------------------------------- rank ATS

def pseudo_ranks(y, cell, C):
    """psi_i = 1/2 + N * (1/C) * sum_c F_c(y_i), F_c normalised ECDF (explicit counts)."""
    y = np.asarray(y, dtype=float)
    cell = np.asarray(cell)
    n = len(y)
    psi = np.empty(n)
    for i in range(n):
        tot = 0.0
        for c in range(C):
            yc = y[cell == c]
            tot += (np.sum(yc < y[i]) + 0.5 * np.sum(yc == y[i])) / len(yc)
        psi[i] = 0.5 + n * tot / C
    return psi


def hypothesis_matrix(shape, s):
    blocks = []
    for f, a in enumerate(shape):
        if f in s:
            blocks.append(np.hstack([np.eye(a - 1), -np.ones((a - 1, 1))]))
        else:
            blocks.append(np.ones((1, a)))
    out = np.ones((1, 1))
    for b in blocks:
        out = np.kron(out, b)
    return out


def ats(d, y, scheme):
    y = np.asarray(y, dtype=float)
    cell = np.asarray(d.cell)
    n = len(y)
    R = st.rankdata(y, method="average") if scheme == "mid-ranks" else pseudo_ranks(y, cell, d.C)
    nc = np.array([np.sum(cell == c) for c in range(d.C)], dtype=float)
    rbar = np.array([R[cell == c].mean() for c in range(d.C)])
    p_hat = (rbar - 0.5) / n
    s2 = np.array([np.sum((R[cell == c] - rbar[c]) ** 2) for c in range(d.C)]) / (n * n * (nc - 1))
    V = n * np.diag(s2 / nc)
    Lam = np.diag(1.0 / (nc - 1))
    terms = []
    for s in d.terms:
        L = hypothesis_matrix(d.shape, s)
        T = L.T @ np.linalg.pinv(L @ L.T) @ L
        trTV = np.trace(T @ V)
        F = n * p_hat @ T @ p_hat / trTV
        f = trTV ** 2 / np.trace(T @ V @ T @ V)
        DT = np.diag(np.diag(T))
        f0 = trTV ** 2 / np.trace(DT @ DT @ V @ V @ Lam)
        rec = {"term": d.term_name(s), "F": float(F), "f_hat": float(f), "f0_hat": float(f0),
               "p": float(st.f.sf(F, f, f0)), "p_large_sample": float(st.chi2.sf(F * f, f)), "trace": float(trTV)}
        if all(d.shape[x] == 2 for x in s):
            ell = np.ones((1, 1))
            for x, a in enumerate(d.shape):
                ell = np.kron(ell, np.array([[1.0, -1.0]]) if x in s else np.full((1, a), 1.0 / a))
            rec["effect"] = float((ell @ p_hat)[0])
        terms.append(rec)
    return {"scheme": scheme, "relative_effects": [float(v) for v in p_hat], "terms": terms}


# ----------------------------------------------------------------------------- one factor

def one_factor(groups):
    """Kruskal-Wallis H (tie-corrected) and the rank-transform F it implies (METHODS §5.4)."""
    H, p = st.kruskal(*groups)
    N = sum(len(g) for g in groups)
    k = len(groups)  # (not `C`: patsy formulas see the caller's names)
    F = (H / (k - 1)) / ((N - 1 - H) / (N - k))
    ranks = st.rankdata(np.concatenate(groups), method="average")
    lab = np.concatenate([[i] * len(g) for i, g in enumerate(groups)])
    fit = smf.ols("r ~ C(g)", data=pd.DataFrame({"r": ranks, "g": lab})).fit()
    tab = anova_lm(fit, typ=3)
    return {"H": float(H), "p_H": float(p), "F": float(F), "p_F": float(st.f.sf(F, k - 1, N - k)),
            "F_statsmodels": float(tab.loc["C(g)", "F"]), "df1": k - 1, "df2": N - k,
            "call": "scipy.stats.kruskal(*groups); F = (H/(C-1))/((N-1-H)/(N-C)); anova_lm(ols('r ~ C(g)'), typ=3) on rankdata"}


# ----------------------------------------------------------------------------- driver

def generate():
    out = {}
    for name, (outcome, factors, csvname) in datasets().items():
        rows, levels = read(csvname, outcome, factors)
        d = Design(rows, levels, factors)
        yf = [float(v) for v in d.y]
        rec = {"csv": f"tests/data/{csvname}", "outcome": outcome, "factors": factors, "n": d.n,
               "balanced": len(set(d.cell_n)) == 1,
               "art_call": "exact Overrides-5 alignment (fractions); scipy rankdata(method='average'); "
                           "anova_lm(ols('" + d.formula() + "').fit(), typ=3)",
               "art": art(d),
               "art_observation_weighted": art_observation_weighted(d, d.frame(yf)),
               "ats_call": "numpy from METHODS §6.2 (T = L'(LL')^+ L); scipy.stats.f.sf(F, f, f0)",
               "ats_mid_ranks": ats(d, yf, "mid-ranks"),
               "ats_pseudo_ranks": ats(d, yf, "pseudo-ranks"),
               "distinct": len(set(yf)),
               "tied_share": float(sum(c for c in pd.Series(yf).value_counts() if c > 1) / d.n)}
        artc_fams = []
        for f in range(d.k):
            artc_fams.append(artc(d, "pairwise", [f]))
        artc_fams.append(artc(d, "pairwise", list(range(d.k))))
        for s in d.terms:
            if len(s) >= 2:
                artc_fams.append(artc(d, "interaction", s))
                if len(s) < d.k:
                    artc_fams.append(artc(d, "pairwise", s))
        rec["artc"] = artc_fams
        groups = {}
        for f in factors:
            # The factor alone: rows need only the outcome and this factor (as quorum reads them).
            rows1, levels1 = read(csvname, outcome, [f])
            g = [np.array([float(r[1]) for r in rows1 if r[0][0] == lab]) for lab in levels1[0]]
            groups[f] = one_factor(g)
        rec["one_factor"] = groups
        out[name] = rec
    # METHODS §12 data: one factor with the six cells as levels; and log(y) for ART and ATS.
    rows, levels = read("methods12.csv", "y", ["A", "B"])
    d = Design(rows, levels, ["A", "B"])
    yf = np.array([float(v) for v in d.y])
    cells = [[float(d.y[j]) for j in range(d.n) if d.cell[j] == c] for c in range(d.C)]
    out["methods12_cells"] = {"cells": cells, **one_factor([np.array(c) for c in cells])}
    logy = np.log(yf)
    log_cells = [[float(logy[j]) for j in range(d.n) if d.cell[j] == c] for c in range(d.C)]
    frame = d.frame(logy)
    log_art = []
    for s in d.terms:
        cellmean = frame.groupby("cell")["r"].transform("mean").to_numpy()
        # Overrides-5 alignment in floats (log values are irrational: no exact ties to protect).
        means = np.array([np.mean(c) for c in log_cells])
        def u(t):
            return np.array([np.mean([means[j] for j, cc in enumerate(d.cells) if all(cc[f] == d.cells[c][f] for f in t)])
                             for c in range(d.C)])
        e = sum((-1) ** (len(s) - r) * u(t) for r in range(len(s) + 1) for t in itertools.combinations(s, r))
        aligned = logy - cellmean + e[np.asarray(d.cell)]
        ranks = st.rankdata(aligned, method="average")
        rws, _, _ = anova3(d, ranks)
        log_art.append({"term": d.term_name(s), "F": rws[d.term_name(s)][2], "p": rws[d.term_name(s)][3]})
    out["methods12_log"] = {"cells": log_cells, "call": "numpy.log(y); ART as above in floats",
                            "art": log_art, "ats_pseudo_ranks": ats(d, logy, "pseudo-ranks"),
                            "ats_mid_ranks": ats(d, logy, "mid-ranks")}
    return out
