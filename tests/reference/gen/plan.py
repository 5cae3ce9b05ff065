"""Reference values for `quorum plan` (the plan module).

Library calls (recorded in each record's `call`):
* Power of the classical F under normal errors: scipy `stats.ncf.sf(stats.f.isf(alpha,
  df1, df2), df1, df2, lam)`, with the noncentrality computed here independently in
  dense numpy from the cell means: lam = (L mu)' (L D^-1 L')^-1 (L mu) / sigma^2, where
  L is the Kronecker hypothesis matrix of the term built with Helmert contrasts (a
  different basis from quorum's [I | -1]; the quadratic form does not depend on it).
  The cell means of `--effect` scenarios are built here from the definition in
  `src/plan/scenario.rs` (linear-by-linear pattern scaled to root mean square f).
* Quantiles of the standardised error families: scipy `stats.norm.ppf`,
  `stats.lognorm(s).ppf`, `stats.t(df).ppf`, `stats.skewnorm(a).ppf`, each shifted and
  scaled with the family's `stats(moments='mv')`; and the family's skewness from
  `stats(moments='s')`.
* Clopper-Pearson intervals: scipy `stats.binomtest(x, n).proportion_ci(0.95, 'exact')`.
"""
import itertools

import numpy as np
import scipy.stats as st


def helmert(a):
    """(a-1) x a Helmert contrasts: row j compares level j+1 with the mean of levels 0..j."""
    h = np.zeros((a - 1, a))
    for j in range(a - 1):
        h[j, : j + 1] = 1.0
        h[j, j + 1] = -(j + 1)
    return h


def hypothesis(shape, term):
    mats = [helmert(a) if f in term else np.ones((1, a)) for f, a in enumerate(shape)]
    out = mats[0]
    for m in mats[1:]:
        out = np.kron(out, m)
    return out


def terms_of(k):
    subsets = [tuple(f for f in range(k) if mask & (1 << f)) for mask in range(1, 1 << k)]
    return sorted(subsets, key=lambda s: (len(s), s))


def name(term):
    return ":".join("ABCDEF"[f] for f in term)


def pattern(shape, term):
    cells = list(itertools.product(*[range(a) for a in shape]))
    raw = np.array([np.prod([lv[f] - (shape[f] - 1) / 2 for f in term]) for lv in cells])
    return raw / np.sqrt(np.mean(raw**2))


def power_case(label, shape, n, alpha, effects=None, means=None):
    k = len(shape)
    if means is None:
        mu = np.zeros(int(np.prod(shape)))
        for t, f in effects.items():
            term = tuple("ABCDEF".index(c) for c in t.split(":"))
            mu = mu + f * pattern(shape, term)
    else:
        mu = np.array(means, dtype=float)
    n = np.array(n, dtype=float)
    dinv = np.diag(1.0 / n)
    df2 = int(n.sum() - len(n))
    terms = []
    for term in terms_of(k):
        L = hypothesis(shape, term)
        lm = L @ mu
        lam = float(lm @ np.linalg.solve(L @ dinv @ L.T, lm))
        df1 = L.shape[0]
        crit = st.f.isf(alpha, df1, df2)
        terms.append({
            "term": name(term),
            "df1": df1,
            "df2": df2,
            "lambda": lam,
            "power": float(st.ncf.sf(crit, df1, df2, lam)) if lam > 1e-12 else alpha,
        })
    return {
        "label": label,
        "shape": list(shape),
        "n": [int(v) for v in n],
        "alpha": alpha,
        "effects": effects,
        "means": None if means is None else list(means),
        "call": "lam from numpy (Helmert L, D = diag(n)); power = scipy.stats.ncf.sf(scipy.stats.f.isf(alpha, df1, df2), df1, df2, lam)",
        "terms": terms,
    }


def families():
    probs = [0.05, 0.25, 0.5, 0.75, 0.95]
    out = []
    specs = [
        ("normal", st.norm()),
        ("lognormal:0.5", st.lognorm(0.5)),
        ("lognormal:1", st.lognorm(1.0)),
        ("t:5", st.t(5)),
        ("t:3.5", st.t(3.5)),
        ("skew-normal:5", st.skewnorm(5)),
        ("skew-normal:-2", st.skewnorm(-2)),
    ]
    for errors, d in specs:
        m, v = d.stats(moments="mv")
        sd = float(np.sqrt(v))
        out.append({
            "errors": errors,
            "probs": probs,
            "quantiles": [float((d.ppf(p) - m) / sd) for p in probs],
            "skewness": float(d.stats(moments="s")),
            "call": "scipy.stats.<family>.ppf(p), standardised with .stats(moments='mv'); skewness .stats(moments='s')",
        })
    return out


def clopper():
    out = []
    for x, n in [(50, 1000), (7, 400), (1, 30), (183, 200), (0, 4000), (212, 4000)]:
        ci = st.binomtest(x, n).proportion_ci(0.95, "exact")
        out.append({"x": x, "n": n, "low": float(ci.low), "high": float(ci.high),
                    "call": "scipy.stats.binomtest(x, n).proportion_ci(0.95, 'exact')"})
    return out


def generate():
    return {
        "power": [
            power_case("3x2 balanced, A f=0.25", [3, 2], [20] * 6, 0.05, effects={"A": 0.25}),
            power_case("2x2 unbalanced, B f=0.2 and A:B f=0.15", [2, 2], [12, 8, 10, 15], 0.05,
                       effects={"B": 0.2, "A:B": 0.15}),
            power_case("2x3 means given", [2, 3], [10] * 6, 0.05, means=[0.0, 0.3, 0.6, 0.2, 0.2, 0.9]),
            power_case("2x2x2 balanced, A:B:C f=0.2, alpha 0.01", [2, 2, 2], [15] * 8, 0.01,
                       effects={"A:B:C": 0.2, "C": 0.1}),
        ],
        "families": families(),
        "clopper_pearson": clopper(),
    }
