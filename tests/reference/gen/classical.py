"""Classical ANOVA reference values: statsmodels OLS + anova_lm (Types I, II, III).

Model: `ols('y ~ C(A, Sum) * C(B, Sum) [* C(C, Sum)]')`, sum-to-zero coding for every
type (Type III requires it; Types I and II do not depend on coding). Effect sizes are
computed from statsmodels' sums of squares with the METHODS §1.4 formulas; marginal
means come from pandas group means, their intervals from scipy `t.ppf`.
"""
import numpy as np
import pandas as pd
import scipy.stats as st
import statsmodels.formula.api as smf
from statsmodels.stats.anova import anova_lm

from gen import _datasets as ds


def term_name(index_label, factors):
    # statsmodels labels rows like 'C(A, Sum):C(B, Sum)'.
    parts = [p[2:].split(",")[0] for p in index_label.split(":")]
    return ":".join(parts)


def level_label(level):
    """The label as written in the CSV (pandas writes floats like 0.5, 1.0, 2.0)."""
    return str(level)


def analyse(df, outcome, factors):
    src = ds.complete(df, outcome, factors)
    # Only the analysed columns, renamed so that a factor called `C` cannot shadow patsy's C().
    d = pd.DataFrame({"yy": src[outcome].astype(float)})
    for i, f in enumerate(factors):
        d[f"f{i}"] = src[f]
    rhs = " * ".join(f"C(f{i}, Sum)" for i in range(len(factors)))
    formula = f"yy ~ {rhs}"
    fit = smf.ols(formula, data=d).fit()
    out = {"call": f"anova_lm(ols('{formula}', data).fit(), typ=1|2|3)", "n": int(len(d)),
           "sse": float(fit.ssr), "df_error": float(fit.df_resid), "sst": float(((d.yy - d.yy.mean()) ** 2).sum())}
    for typ in (1, 2, 3):
        table = anova_lm(fit, typ=typ)
        rows = []
        for label, r in table.iterrows():
            if label in ("Intercept", "Residual"):
                continue
            name = ":".join(factors[int(p.split(",")[0][3:])] for p in label.split(":"))
            rows.append({"term": name, "ss": float(r["sum_sq"]), "df": float(r["df"]),
                         "F": float(r["F"]), "p": float(r["PR(>F)"])})
        out[f"type{typ}"] = rows
    # Effect sizes (METHODS §1.4) from the Type III table.
    mse = fit.ssr / fit.df_resid
    es = []
    for r in out["type3"]:
        ss, dfs = r["ss"], r["df"]
        es.append({"term": r["term"], "eta_sq": ss / out["sst"], "partial_eta_sq": ss / (ss + fit.ssr),
                   "omega_sq": (ss - dfs * mse) / (out["sst"] + mse),
                   "partial_omega_sq": (ss - dfs * mse) / (ss + (len(d) - dfs) * mse)})
    # Steiger (2004) interval for partial eta squared: roots of scipy.stats.ncf.cdf in λ
    # (brentq), mapped by λ/(λ + N) (METHODS §1.4; Overrides 4: one 0.95 interval).
    from scipy.optimize import brentq
    n_obs = len(d)
    for r, e in zip(out["type3"], es):
        f_obs, d1, d2 = r["F"], r["df"], fit.df_resid

        def root(target):
            g = lambda lam: st.ncf.cdf(f_obs, d1, d2, lam) - target
            if st.f.cdf(f_obs, d1, d2) < target:
                return 0.0
            hi = 1.0
            while g(hi) > 0:
                hi *= 2
            return brentq(g, 0.0, hi, xtol=1e-12, rtol=1e-14)

        lam_lo, lam_hi = root(0.975), root(0.025)
        e["partial_eta_sq_ci95"] = [lam_lo / (lam_lo + n_obs), lam_hi / (lam_hi + n_obs)]
        e["lambda_ci95"] = [lam_lo, lam_hi]
    out["effect_sizes_type3"] = es
    out["steiger_call"] = "brentq on scipy.stats.ncf.cdf(F, df1, df2, lambda) = 0.975 / 0.025; eta2 = lambda/(lambda + N)"
    # Marginal means with 95% t intervals from the pooled error (df N − C).
    tq = st.t.ppf(0.975, fit.df_resid)
    cells = d.groupby([f"f{i}" for i in range(len(factors))])["yy"]
    cm, cn = cells.mean(), cells.count()
    mm = []
    for i, f in enumerate(factors):
        for level in sorted(d[f"f{i}"].unique()):
            sel = [k for k in cm.index if (k[i] if isinstance(k, tuple) else k) == level]
            u = float(np.mean([cm[k] for k in sel]))
            se_u = np.sqrt(mse * sum(1.0 / cn[k] for k in sel)) / len(sel)
            w = float(d.loc[d[f"f{i}"] == level, "yy"].mean())
            nl = int((d[f"f{i}"] == level).sum())
            se_w = np.sqrt(mse / nl)
            mm.append({"factor": f, "level": level_label(level), "n": nl, "unweighted": u,
                       "unweighted_ci": [u - tq * se_u, u + tq * se_u], "weighted": w,
                       "weighted_ci": [w - tq * se_w, w + tq * se_w]})
    out["marginal_means"] = mm
    out["marginal_call"] = "pandas groupby means; scipy.stats.t.ppf(0.975, df_resid) with statsmodels MSE"
    return out


def generate():
    out = {}
    for name, loader in ds.ALL.items():
        df, outcome, factors, csv = loader()
        ds.write_csv(df, csv)
        out[name] = {"csv": f"tests/data/{csv}", "outcome": outcome, "factors": factors,
                     **analyse(df, outcome, factors)}
    return out
