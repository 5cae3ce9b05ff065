"""Reference values for src/dist: central and noncentral distributions, studentized range.

Each grid is a dict with
  "call":    the exact library call(s) behind each value column, as a string,
  "columns": the column names of "rows",
  "rows":    the records (one list per record, in the order of "columns").

Primary source: scipy.stats (the acceptance criterion in the brief is "against scipy").
Second source: mpmath at 50 significant digits (dps = 50), evaluated at the *exact*
binary value of every double input (mpmath.mpf(float) is exact). Where mpmath's own
betainc is too slow (a shape parameter > 1000: it sums a hypergeometric series),
the second source is the Lentz continued fraction for I_x(a, b) evaluated in mpmath at
dps = 50 with the usual symmetry switch (column note says so); this is an independent
check of the double-precision arithmetic, not of the formula.

A column "<name>_scipy_ok" is 1 when scipy and mpmath agree to 5e-13 relative (1e-300
absolute) and 0 where scipy is doubtful; the Rust tests then use mpmath only.
"""
import math

import mpmath as mp
import numpy as np
from scipy import special, stats

mp.mp.dps = 50

DOUBT_REL = 5e-13  # scipy and mpmath must agree this well for scipy to count as a reference

# ---------------------------------------------------------------------------------------
# mpmath helpers (exact inputs, 50 digits)
# ---------------------------------------------------------------------------------------


def _mpf(x):
    return mp.mpf(float(x))


def mp_beta_cf(a, b, x, y):
    """I_x(a, b) by the Lentz continued fraction at dps 50 (Numerical Recipes form), with
    the symmetry switch at x = (a + 1)/(a + b + 2); y = 1 - x is passed exactly.
    Returns (I_x(a,b), I_y(b,a) = 1 - I_x(a,b)), the small one computed directly."""
    a, b, x, y = mp.mpf(a), mp.mpf(b), mp.mpf(x), mp.mpf(y)
    if x <= 0:
        return mp.mpf(0), mp.mpf(1)
    if y <= 0:
        return mp.mpf(1), mp.mpf(0)
    swap = x > (a + 1) / (a + b + 2)
    if swap:
        a, b, x, y = b, a, y, x
    lnpre = a * mp.log(x) + b * mp.log(y) - (mp.loggamma(a) + mp.loggamma(b) - mp.loggamma(a + b))
    tiny = mp.mpf(10) ** -200
    eps = mp.mpf(10) ** -45
    qab, qap, qam = a + b, a + 1, a - 1
    c = mp.mpf(1)
    d = 1 - qab * x / qap
    if abs(d) < tiny:
        d = tiny
    d = 1 / d
    h = d
    m = 1
    while True:
        m2 = 2 * m
        aa = m * (b - m) * x / ((qam + m2) * (a + m2))
        d = 1 + aa * d
        d = tiny if abs(d) < tiny else d
        c = 1 + aa / c
        c = tiny if abs(c) < tiny else c
        d = 1 / d
        h *= d * c
        aa = -(a + m) * (qab + m) * x / ((a + m2) * (qap + m2))
        d = 1 + aa * d
        d = tiny if abs(d) < tiny else d
        c = 1 + aa / c
        c = tiny if abs(c) < tiny else c
        d = 1 / d
        de = d * c
        h *= de
        if abs(de - 1) < eps:
            break
        m += 1
        if m > 10_000_000:
            raise RuntimeError("cf did not converge")
    small = mp.exp(lnpre) * h / a
    big = 1 - small
    return (big, small) if swap else (small, big)


def mp_beta_both(a, b, x, y):
    """(I_x(a,b), I_y(b,a)) with y = 1 - x passed exactly; the smaller of the two is computed
    as its own lower integral so a tiny tail keeps its digits. mpmath.betainc when
    max(a, b) <= 1000 and min(x, y) > 1e-30 (it returns 0 for I_x(0.001, 2) at x = 1e-300),
    else the dps-50 continued fraction."""
    if max(a, b) <= 1000 and min(x, y) > 1e-30:
        lo = mp.betainc(a, b, 0, x, regularized=True)
        hi = mp.betainc(b, a, 0, y, regularized=True)
        # Each value is taken from its own integral where it is the small one (there its
        # argument is exact); the large one is the complement of the other.
        return (lo if lo <= 0.5 else 1 - hi), (hi if hi <= 0.5 else 1 - lo)
    return mp_beta_cf(a, b, x, y)


MP_BETA_NOTE = ("mpmath.betainc(a, b, 0, x, regularized=True) and betainc(b, a, 0, 1 - x, ...) at dps 50 "
                "(1 - x formed exactly from the inputs); "
                "for max(a, b) > 1000 or min(x, 1 - x) < 1e-30 the Lentz continued fraction at dps 50 (mp_beta_cf in this file)")


def mp_gamma_lower_series(a, x):
    """P(a, x) = x^a e^-x / Gamma(a+1) * sum_n x^n / ((a+1)...(a+n)) at dps 50."""
    term = mp.mpf(1)
    total = mp.mpf(1)
    n = 0
    while True:
        n += 1
        term *= x / (a + n)
        total += term
        if term < total * mp.mpf(10) ** -45:
            break
    return mp.exp(a * mp.log(x) - x - mp.loggamma(a + 1)) * total


def mp_gamma_both(a, x):
    """(P(a, x), Q(a, x)) at dps 50. mpmath's lower gammainc gives up (hypergeometric series
    "converges too slowly") for very large a; then the plain power series is summed instead."""
    a, x = mp.mpf(a), mp.mpf(x)
    upper = mp.gammainc(a, x, mp.inf, regularized=True)
    try:
        lower = mp.gammainc(a, 0, x, regularized=True)
    except mp.libmp.NoConvergence:
        lower = mp_gamma_lower_series(a, x)
    return lower, upper


def rel(a, b):
    a, b = mp.mpf(a), mp.mpf(b)
    if b == 0:
        return 0.0 if abs(a) < mp.mpf(1e-300) else math.inf
    return float(abs(a - b) / abs(b))


def ok(scipy_value, mp_value):
    if abs(mp_value) < mp.mpf(1e-305):
        return int(abs(scipy_value) < 1e-300)
    return int(rel(scipy_value, mp_value) <= DOUBT_REL)


# ---------------------------------------------------------------------------------------
# grids
# ---------------------------------------------------------------------------------------

UPPER_P = [0.5, 0.3, 0.1, 1e-2, 1e-3, 1e-5, 1e-10, 1e-20, 1e-50, 1e-100, 1e-150, 1e-200, 1e-250, 1e-300]
LOWER_P = [0.1, 1e-3, 1e-10, 1e-30, 1e-100, 1e-250]
DFS = [1, 2, 3, 5, 6.74, 10, 10.63, 33, 100, 1e3, 1e4, 1e5, 1e6]


def normal_grid():
    xs = sorted({0.0, 1e-300, 1e-10, 0.1, 0.5, 1.0, 1.5, 2.0, 2.5, 3.0, 4.0, 5.0, 6.0, 8.0, 10.0,
                 12.5, 15.0, 20.0, 25.0, 30.0, 33.5, 35.0, 37.0, 37.5, 38.0, 38.4})
    xs = sorted({-x for x in xs} | set(xs))
    rows = []
    for x in xs:
        X = _mpf(x)
        cdf_mp, sf_mp = mp.ncdf(X), mp.ncdf(-X)
        pdf_mp = mp.npdf(X)
        cdf, sf, pdf = stats.norm.cdf(x), stats.norm.sf(x), stats.norm.pdf(x)
        rows.append([x, cdf, sf, pdf, float(cdf_mp), float(sf_mp), float(pdf_mp),
                     ok(cdf, cdf_mp), ok(sf, sf_mp), ok(pdf, pdf_mp)])
    return {
        "call": {"cdf": "scipy.stats.norm.cdf(x)", "sf": "scipy.stats.norm.sf(x)", "pdf": "scipy.stats.norm.pdf(x)",
                 "cdf_mp": "mpmath.ncdf(x)", "sf_mp": "mpmath.ncdf(-x)", "pdf_mp": "mpmath.npdf(x)"},
        "columns": ["x", "cdf", "sf", "pdf", "cdf_mp", "sf_mp", "pdf_mp", "cdf_scipy_ok", "sf_scipy_ok", "pdf_scipy_ok"],
        "rows": rows,
    }


def normal_quantile_grid():
    ps = [1e-300, 1e-250, 1e-200, 1e-100, 1e-50, 1e-20, 1e-10, 1e-5, 1e-3, 0.02, 0.02425, 0.025, 0.05, 0.075,
          0.1, 0.2, 0.3, 0.4, 0.45, 0.5, 0.55, 0.6, 0.7, 0.8, 0.9, 0.925, 0.95, 0.975, 0.97575, 0.99, 0.999,
          1 - 1e-5, 1 - 1e-10, 1 - 2.0 ** -52]
    rows = []
    for p in ps:
        x = stats.norm.ppf(p)
        P = _mpf(p)
        x_mp = mp.findroot(lambda t: mp.ncdf(t) - P, _mpf(x))
        rows.append([p, x, float(x_mp), ok(x, x_mp)])
    return {
        "call": {"x": "scipy.stats.norm.ppf(p)",
                 "x_mp": "mpmath.findroot(lambda t: mpmath.ncdf(t) - p, scipy value)"},
        "columns": ["p", "x", "x_mp", "x_scipy_ok"],
        "rows": rows,
    }


def t_grid():
    rows = []
    for df in DFS:
        for p in UPPER_P:
            x = float(stats.t.isf(p, df))
            if not (math.isfinite(x) and x > 0):
                continue
            for xx in (x, -x):
                X, D = _mpf(xx), _mpf(df)
                # P(T > |x|) = I_{df/(df+x^2)}(df/2, 1/2) / 2
                small, big = mp_beta_both(D / 2, mp.mpf(1) / 2, D / (D + X * X), X * X / (D + X * X))
                tail = small / 2
                sf_mp = tail if xx > 0 else 1 - tail
                cdf_mp = 1 - tail if xx > 0 else tail
                sf, cdf = stats.t.sf(xx, df), stats.t.cdf(xx, df)
                rows.append([df, xx, sf, cdf, float(sf_mp), float(cdf_mp), ok(sf, sf_mp), ok(cdf, cdf_mp)])
    return {
        "call": {"x": "scipy.stats.t.isf(p, df) for p in UPPER_P, then x and -x",
                 "sf": "scipy.stats.t.sf(x, df)", "cdf": "scipy.stats.t.cdf(x, df)",
                 "sf_mp": "tail = I_{df/(df+x^2)}(df/2, 1/2)/2; " + MP_BETA_NOTE,
                 "cdf_mp": "same tail, complemented"},
        "columns": ["df", "x", "sf", "cdf", "sf_mp", "cdf_mp", "sf_scipy_ok", "cdf_scipy_ok"],
        "rows": rows,
    }


def chi2_grid():
    rows = []
    for df in [0.5] + DFS:
        xs = [float(stats.chi2.isf(p, df)) for p in UPPER_P] + [float(stats.chi2.ppf(p, df)) for p in LOWER_P]
        for x in xs:
            if not (math.isfinite(x) and x > 1e-290):
                continue
            lo, hi = mp_gamma_both(_mpf(df) / 2, _mpf(x) / 2)
            sf, cdf = stats.chi2.sf(x, df), stats.chi2.cdf(x, df)
            rows.append([df, x, sf, cdf, float(hi), float(lo), ok(sf, hi), ok(cdf, lo)])
    return {
        "call": {"x": "scipy.stats.chi2.isf(p, df) for p in UPPER_P and chi2.ppf(p, df) for p in LOWER_P",
                 "sf": "scipy.stats.chi2.sf(x, df)", "cdf": "scipy.stats.chi2.cdf(x, df)",
                 "sf_mp": "mpmath.gammainc(df/2, x/2, inf, regularized=True)",
                 "cdf_mp": "mpmath.gammainc(df/2, 0, x/2, regularized=True); where it raises NoConvergence (df >= 1e5), the power series mp_gamma_lower_series at dps 50"},
        "columns": ["df", "x", "sf", "cdf", "sf_mp", "cdf_mp", "sf_scipy_ok", "cdf_scipy_ok"],
        "rows": rows,
    }


F_D1 = [1, 2, 5, 10.63, 33, 1000]
F_D2 = [1, 2, 3, 5, 6.74, 10, 33, 100, 1e3, 1e4, 1e5, 1e6, math.inf]
F_UP = [0.5, 0.1, 1e-3, 1e-10, 1e-20, 1e-50, 1e-100, 1e-250]
F_LO = [0.1, 1e-5, 1e-20, 1e-100]


def f_grid():
    rows = []
    for d1 in F_D1:
        for d2 in F_D2:
            if math.isinf(d2):
                xs = [float(stats.chi2.isf(p, d1)) / d1 for p in F_UP] + [float(stats.chi2.ppf(p, d1)) / d1 for p in F_LO]
            else:
                xs = [float(stats.f.isf(p, d1, d2)) for p in F_UP] + [float(stats.f.ppf(p, d1, d2)) for p in F_LO]
            for x in xs:
                if not (math.isfinite(x) and x > 1e-290):
                    continue
                X, A, B = _mpf(x), _mpf(d1), _mpf(d2)
                if math.isinf(d2):
                    lo, hi = mp_gamma_both(A / 2, A * X / 2)
                    sf, cdf = stats.chi2.sf(d1 * x, d1), stats.chi2.cdf(d1 * x, d1)
                else:
                    # P(F > x) = I_{d2/(d2 + d1 x)}(d2/2, d1/2)
                    hi, lo = mp_beta_both(B / 2, A / 2, B / (B + A * X), A * X / (B + A * X))
                    sf, cdf = stats.f.sf(x, d1, d2), stats.f.cdf(x, d1, d2)
                rows.append([d1, d2, x, sf, cdf, float(hi), float(lo), ok(sf, hi), ok(cdf, lo)])
    return {
        "call": {"x": "scipy.stats.f.isf(p, d1, d2) / f.ppf(p, d1, d2) (d2 = inf: chi2.isf(p, d1)/d1, chi2.ppf(p, d1)/d1)",
                 "sf": "scipy.stats.f.sf(x, d1, d2); d2 = inf: scipy.stats.chi2.sf(d1*x, d1)",
                 "cdf": "scipy.stats.f.cdf(x, d1, d2); d2 = inf: scipy.stats.chi2.cdf(d1*x, d1)",
                 "sf_mp": "I_{d2/(d2+d1 x)}(d2/2, d1/2): " + MP_BETA_NOTE + "; d2 = inf: mpmath.gammainc(d1/2, d1*x/2, inf, regularized=True) with the exact product",
                 "cdf_mp": "the complement, same sources"},
        "columns": ["d1", "d2", "x", "sf", "cdf", "sf_mp", "cdf_mp", "sf_scipy_ok", "cdf_scipy_ok"],
        "rows": rows,
    }


def beta_grid():
    cases = [(0.5, 0.5), (1, 1), (2, 3), (0.1, 10), (10, 0.1), (1e-3, 2), (5, 50), (50, 5), (100, 900),
             (3, 1e5), (1e5, 3), (1e3, 1e3), (1e4, 2e4), (1e6, 1e6), (5e5, 0.5), (0.5, 5e5)]
    rows = []
    for a, b in cases:
        m = a / (a + b)
        sd = math.sqrt(a * b / ((a + b) ** 2 * (a + b + 1)))
        xs = {1e-300, 1e-100, 1e-10, 1e-3, 0.1, 0.25, 0.5, 0.75, 0.9, 0.999, 1 - 1e-10}
        for z in (-40, -10, -3, -1, -0.1, 0, 0.1, 1, 3, 10, 40):
            x = m + z * sd
            if 0 < x < 1:
                xs.add(x)
        for x in sorted(xs):
            lo, hi = mp_beta_both(_mpf(a), _mpf(b), _mpf(x), 1 - _mpf(x))
            v = special.betainc(a, b, x)
            vc = special.betaincc(a, b, x)
            rows.append([a, b, x, v, vc, float(lo), float(hi), ok(v, lo), ok(vc, hi)])
    return {
        "call": {"I": "scipy.special.betainc(a, b, x)", "Ic": "scipy.special.betaincc(a, b, x)",
                 "I_mp": MP_BETA_NOTE, "Ic_mp": "the complement, same source"},
        "columns": ["a", "b", "x", "I", "Ic", "I_mp", "Ic_mp", "I_scipy_ok", "Ic_scipy_ok"],
        "rows": rows,
    }


def gamma_grid():
    rows = []
    for a in [1e-3, 0.1, 0.5, 1, 1.5, 2, 5, 10.5, 33, 100, 1e3, 1e4, 1e5, 5e5]:
        xs = {1e-300, 1e-50, 1e-10, 1e-3, 0.1, 0.5, 1, 2, 5, 10, 30, 100, 700, 1e4}
        sd = math.sqrt(a)
        for z in (-30, -10, -3, -1, -0.1, 0, 0.1, 1, 3, 10, 30, 100):
            x = a + z * sd
            if x > 0:
                xs.add(x)
        for x in sorted(xs):
            lo, hi = mp_gamma_both(a, x)
            p, q = special.gammainc(a, x), special.gammaincc(a, x)
            rows.append([a, x, p, q, float(lo), float(hi), ok(p, lo), ok(q, hi)])
    return {
        "call": {"P": "scipy.special.gammainc(a, x)", "Q": "scipy.special.gammaincc(a, x)",
                 "P_mp": "mpmath.gammainc(a, 0, x, regularized=True) (power series mp_gamma_lower_series where it raises NoConvergence)", "Q_mp": "mpmath.gammainc(a, x, inf, regularized=True)"},
        "columns": ["a", "x", "P", "Q", "P_mp", "Q_mp", "P_scipy_ok", "Q_scipy_ok"],
        "rows": rows,
    }


def ln_gamma_grid():
    xs = [1e-300, 1e-100, 1e-10, 1e-3, 0.1, 0.5, 0.9, 0.99, 1 - 1e-9, 1.0, 1 + 1e-9, 1.01, 1.3, 1.5, 1.9, 1.99,
          2.0, 2.01, 2.5, 3.0, 4.7, 7.5, 9.99, 10.0, 12.3, 33.0, 100.5, 1e3, 1e5, 1e10, 1e100, 1e300]
    rows = []
    for x in xs:
        v = special.gammaln(x)
        v_mp = mp.loggamma(_mpf(x))
        rows.append([x, v, float(v_mp), ok(v, v_mp)])
    return {
        "call": {"lngamma": "scipy.special.gammaln(x)", "lngamma_mp": "mpmath.loggamma(x)"},
        "columns": ["x", "lngamma", "lngamma_mp", "lngamma_scipy_ok"],
        "rows": rows,
    }


def _mp_tails(kind, params, x):
    """(cdf, sf) at dps 50 for the central quantile grids; the small side is direct."""
    X = x if isinstance(x, mp.mpf) else _mpf(x)
    if kind == "t":
        (df,) = params
        D = _mpf(df)
        small, _ = mp_beta_both(D / 2, mp.mpf(1) / 2, D / (D + X * X), X * X / (D + X * X))
        tail = small / 2
        return (tail, 1 - tail) if x < 0 else (1 - tail, tail)
    if kind == "chi2":
        (df,) = params
        return mp_gamma_both(_mpf(df) / 2, X / 2)
    if kind == "f":
        d1, d2 = params
        A = _mpf(d1)
        if math.isinf(d2):
            return mp_gamma_both(A / 2, A * X / 2)
        B = _mpf(d2)
        hi, lo = mp_beta_both(B / 2, A / 2, B / (B + A * X), A * X / (B + A * X))
        return lo, hi
    a, b = params
    return mp_beta_both(_mpf(a), _mpf(b), X, 1 - X)


def mp_quantile(kind, params, p, guess):
    """Lower-tail quantile at dps 50. Unknown u = ln|x| (logit x for the beta); the small
    tail is matched in logs, ln(tail(u)) = ln(min(p, 1 - p)). The root is bracketed
    around scipy's value (steps growing by 4 from 1e-10) and found by the Illinois method."""
    if kind == "t" and p == 0.5:
        return mp.mpf(0)
    with mp.workdps(30):  # 30 digits are ample for a 1e-12 check and halve the time
        return +_mp_quantile(kind, params, p, guess)


def _mp_quantile(kind, params, p, guess):
    lower = p <= 0.5
    target = mp.log(_mpf(p) if lower else 1 - _mpf(p))

    def x_of(u):
        return 1 / (1 + mp.exp(-u)) if kind == "beta" else mp.exp(u)

    if kind == "t":
        def f(u):  # decreasing in u: P(T > e^u) for the small tail
            return target - mp.log(_mp_tails(kind, params, x_of(u))[1])
    else:
        def f(u):  # increasing in u
            c, s = _mp_tails(kind, params, x_of(u))
            return mp.log(c) - target if lower else target - mp.log(s)
    g = abs(guess)
    if kind == "beta":
        u0 = mp.log(_mpf(g)) - mp.log(1 - _mpf(g))
    else:
        u0 = mp.log(_mpf(g))
    f0 = f(u0)
    step = mp.mpf("1e-10") * max(1, abs(u0))
    direction = 1 if f0 < 0 else -1
    for _ in range(60):
        u1 = u0 + direction * step
        f1 = f(u1)
        if (f1 > 0) == (direction > 0):
            break
        u0, f0 = u1, f1
        step *= 4
    else:
        raise RuntimeError(f"no bracket: {kind} {params} {p}")
    u = mp.findroot(f, (min(u0, u1), max(u0, u1)), solver="illinois", tol=mp.mpf(10) ** -60,
                    maxsteps=400, verify=False)
    if abs(f(u)) > mp.mpf(10) ** -20 * max(1, abs(target)):
        raise RuntimeError(f"mpmath quantile did not converge: {kind} {params} {p}")
    x = x_of(u)
    return -x if (kind == "t" and p < 0.5) else x


def quantile_grid():
    """Central quantiles: scipy ppf, confirmed by an mpmath root (x_mp); compared in x."""
    ps = [1e-100, 1e-20, 1e-5, 0.025, 0.3, 0.5, 0.7, 0.95, 0.975, 0.999999]
    grids = {"t_quantile": [], "chi2_quantile": [], "f_quantile": [], "beta_quantile": []}

    def add(name, kind, params, p, x):
        if kind == "t" and p == 0.5:
            x_mp = mp.mpf(0)
        elif x == 0.0 or not math.isfinite(x):
            x_mp = mp.mpf(x)
        else:
            x_mp = mp_quantile(kind, params, p, x)
        good = int(x == 0.0 and x_mp == 0) if x_mp == 0 else int(rel(x, x_mp) <= 1e-12)
        grids[name].append(list(params) + [p, x, float(x_mp), good])

    for df in DFS:
        for p in ps:
            add("t_quantile", "t", (df,), p, float(stats.t.ppf(p, df)))
    for df in [0.5] + DFS:
        for p in ps:
            x = float(stats.chi2.ppf(p, df))
            if x < 1e-300:  # below the double range (df = 0.5, p = 1e-100: x ~ 1e-400)
                grids["chi2_quantile"].append([df, p, x, 0.0, 1])
                continue
            add("chi2_quantile", "chi2", (df,), p, x)
    for d1 in [1, 2, 5, 10.63, 33]:
        for d2 in [1, 2, 6.74, 33, 1e3, 1e6, math.inf]:
            for p in ps:
                if math.isinf(d2):
                    x = float(stats.chi2.ppf(p, d1)) / d1
                else:
                    x = float(stats.f.ppf(p, d1, d2))
                add("f_quantile", "f", (d1, d2), p, x)
    for a, b in [(0.5, 10), (1, 1), (3, 20), (20, 3), (1, 99), (99, 1), (100, 900), (1e4, 1e4), (0.5, 0.5), (17, 4.5)]:
        for p in ps:
            add("beta_quantile", "beta", (a, b), p, float(stats.beta.ppf(p, a, b)))
    mp_note = ("mpmath root (dps 30, Illinois method on a bracket grown around scipy's value, residual < 1e-20·max(1, |ln target|)) "
               "of ln(small tail) = ln(min(p, 1 - p)) in u = ln|x| (logit x for the beta); the tails are the "
               "mpmath sources of the cdf grids above (mp_quantile in this file)")
    return {
        "t_quantile": {"call": {"x": "scipy.stats.t.ppf(p, df)", "x_mp": mp_note},
                       "columns": ["df", "p", "x", "x_mp", "x_scipy_ok"], "rows": grids["t_quantile"]},
        "chi2_quantile": {"call": {"x": "scipy.stats.chi2.ppf(p, df)", "x_mp": mp_note},
                          "columns": ["df", "p", "x", "x_mp", "x_scipy_ok"], "rows": grids["chi2_quantile"]},
        "f_quantile": {"call": {"x": "scipy.stats.f.ppf(p, d1, d2); d2 = inf: scipy.stats.chi2.ppf(p, d1)/d1",
                                "x_mp": mp_note},
                       "columns": ["d1", "d2", "p", "x", "x_mp", "x_scipy_ok"], "rows": grids["f_quantile"]},
        "beta_quantile": {"call": {"x": "scipy.stats.beta.ppf(p, a, b)", "x_mp": mp_note},
                          "columns": ["a", "b", "p", "x", "x_mp", "x_scipy_ok"], "rows": grids["beta_quantile"]},
    }


# ---------------------------------------------------------------------------------------
# noncentral F
# ---------------------------------------------------------------------------------------


def mp_ncf(x, d1, d2, lam):
    """(cdf, sf) of the noncentral F by a direct mpmath sum of the Poisson series at dps 40:
    one incomplete beta (gamma for d2 = inf) at the Poisson mode from mp_beta_both /
    mpmath.gammainc, exact recurrences outward, all terms down to j = 0 and upward until
    the Poisson weight is below 1e-60. Each tail is its own sum (sf = sum w_j (1 - I_j))."""
    with mp.workdps(40):
        X, A = _mpf(x), _mpf(d1)
        mu = _mpf(lam) / 2
        j0 = int(mp.floor(mu))
        a0 = A / 2 + j0
        if math.isinf(d2):
            z = A * X / 2
            i0, c0 = mp_gamma_both(a0, z)
            lnt0 = a0 * mp.log(z) - z - mp.loggamma(a0 + 1)

            def up(a):
                return z / (a + 1)

            def down(a):
                return a / z
        else:
            B = _mpf(d2)
            b = B / 2
            xb, yb = A * X / (A * X + B), B / (A * X + B)
            i0, c0 = mp_beta_both(a0, b, xb, yb)
            lnt0 = a0 * mp.log(xb) + b * mp.log(yb) - (mp.loggamma(a0) + mp.loggamma(b) - mp.loggamma(a0 + b)) - mp.log(a0)

            def up(a):
                return xb * (a + b) / (a + 1)

            def down(a):
                return a / (xb * (a - 1 + b))

        def w(j):
            return mp.exp(-mu + (j * mp.log(mu) if j > 0 else 0) - mp.loggamma(j + 1)) if mu > 0 else mp.mpf(j == 0)

        t0 = mp.exp(lnt0)
        cdf = w(j0) * i0
        sf = w(j0) * c0
        j, a, i, c, t = j0, a0, i0, c0, t0
        while mu > 0:
            i, c = i - t, c + t
            t *= up(a)
            a += 1
            j += 1
            wj = w(j)
            cdf += wj * i
            sf += wj * c
            if j > mu and wj < mp.mpf(10) ** -60:
                break
        j, a, i, c, t = j0, a0, i0, c0, t0
        while j >= 1:
            t *= down(a)
            a -= 1
            i, c = i + t, c - t
            j -= 1
            wj = w(j)
            cdf += wj * i
            sf += wj * c
        return +cdf, +sf


NCF_D1 = [1, 2, 3, 5, 10, 20]
NCF_D2 = [2, 5, 10, 33, 100, 1000, 1e4, math.inf]
NCF_LAM = [0, 0.5, 5, 20, 100, 500]
NCF_LOWER = [1e-10, 1e-4, 0.1, 0.5, 0.9]
NCF_UPPER = [1e-4, 1e-10]


def ncf_agree(scipy_value, mp_value):
    """scipy counts as a reference where it meets the Overrides 3 target against mpmath."""
    m = float(mp_value)
    if m > 1e-10:
        return int(abs(scipy_value - m) <= 1e-10 * m)
    return int(abs(scipy_value - m) <= 1e-15)


def ncf_grid():
    rows = []
    for d1 in NCF_D1:
        for d2 in NCF_D2:
            for lam in NCF_LAM:
                if math.isinf(d2):
                    xs = [float(stats.ncx2.ppf(p, d1, lam)) / d1 if lam > 0 else float(stats.chi2.ppf(p, d1)) / d1
                          for p in NCF_LOWER]
                    xs += [float(stats.ncx2.isf(p, d1, lam)) / d1 if lam > 0 else float(stats.chi2.isf(p, d1)) / d1
                           for p in NCF_UPPER]
                else:
                    xs = [float(stats.ncf.ppf(p, d1, d2, lam)) for p in NCF_LOWER]
                    xs += [float(stats.ncf.isf(p, d1, d2, lam)) for p in NCF_UPPER]
                for x in xs:
                    if not (math.isfinite(x) and x > 1e-300):
                        continue
                    if math.isinf(d2):
                        cdf, sf = stats.ncx2.cdf(d1 * x, d1, lam), stats.ncx2.sf(d1 * x, d1, lam)
                    else:
                        cdf, sf = stats.ncf.cdf(x, d1, d2, lam), stats.ncf.sf(x, d1, d2, lam)
                    cdf_mp, sf_mp = mp_ncf(x, d1, d2, lam)
                    rows.append([d1, d2, lam, x, float(cdf), float(sf), float(cdf_mp), float(sf_mp),
                                 ncf_agree(cdf, cdf_mp), ncf_agree(sf, sf_mp)])
    return {
        "call": {"x": "scipy.stats.ncf.ppf(p, d1, d2, lam) for p in NCF_LOWER, ncf.isf(p, ...) for p in NCF_UPPER "
                      "(d2 = inf: ncx2.ppf/isf(p, d1, lam)/d1)",
                 "cdf": "scipy.stats.ncf.cdf(x, d1, d2, lam); d2 = inf: scipy.stats.ncx2.cdf(d1*x, d1, lam)",
                 "sf": "scipy.stats.ncf.sf(x, d1, d2, lam); d2 = inf: scipy.stats.ncx2.sf(d1*x, d1, lam)",
                 "cdf_mp": "mp_ncf(x, d1, d2, lam): direct mpmath sum of the Poisson series at dps 40 (this file)",
                 "sf_mp": "mp_ncf(...): the upper-tail Poisson sum, summed on its own"},
        "columns": ["d1", "d2", "lambda", "x", "cdf", "sf", "cdf_mp", "sf_mp", "cdf_scipy_ok", "sf_scipy_ok"],
        "rows": rows,
    }


def ncf_interval_grid():
    """Steiger lambda limits: scipy brentq on ncf.cdf, confirmed by the mpmath sum."""
    from scipy.optimize import brentq

    def cdf(f, d1, d2, lam):
        if math.isinf(d2):
            return stats.ncx2.cdf(d1 * f, d1, lam) if lam > 0 else stats.chi2.cdf(d1 * f, d1)
        return stats.ncf.cdf(f, d1, d2, lam) if lam > 0 else stats.f.cdf(f, d1, d2)

    rows = []
    cases = [(1, 33), (2, 33), (3, 10), (5, 100), (1, 1000), (4, math.inf)]
    fs = [0.5, 1.036723047, 3.0, 7.967146081, 24.68232073, 50.0, 200.0]
    for d1, d2 in cases:
        for f in fs:
            for level in (0.90, 0.95, 0.99):
                alpha = 1 - level
                p0 = cdf(f, d1, d2, 0.0)
                limits = []
                for target in (1 - alpha / 2, alpha / 2):
                    if p0 < target:
                        limits.append((0.0, 0.0, 0.0))
                        continue
                    hi = max(1.0, 2 * d1 * f)
                    while cdf(f, d1, d2, hi) > target:
                        hi *= 2
                    lam = brentq(lambda l: cdf(f, d1, d2, l) - target, 0.0, hi, xtol=1e-14, rtol=1e-15, maxiter=500)
                    h = 1e-5 * max(1.0, lam)
                    deriv = (cdf(f, d1, d2, lam + h) - cdf(f, d1, d2, max(lam - h, 0.0))) / (lam + h - max(lam - h, 0.0))
                    resid = float(mp_ncf(f, d1, d2, lam)[0] - target)
                    limits.append((lam, deriv, resid))
                rows.append([f, d1, d2, level, limits[0][0], limits[1][0], limits[0][1], limits[1][1],
                             limits[0][2], limits[1][2]])
    return {
        "call": {"lambda_lo": "scipy.optimize.brentq(lambda l: scipy.stats.ncf.cdf(F, d1, d2, l) - (1 - alpha/2), 0, hi, "
                              "xtol=1e-14, rtol=1e-15) (ncx2.cdf(d1*F, d1, l) for d2 = inf); 0 if f.cdf(F, d1, d2) < 1 - alpha/2",
                 "lambda_hi": "the same with target alpha/2",
                 "dcdf_lo": "d ncf.cdf / d lambda at lambda_lo, central difference h = 1e-5*max(1, lambda)",
                 "dcdf_hi": "the same at lambda_hi",
                 "mp_resid_lo": "mp_ncf(F, d1, d2, lambda_lo).cdf - target (mpmath confirmation of the scipy root)",
                 "mp_resid_hi": "the same at lambda_hi"},
        "columns": ["F", "d1", "d2", "level", "lambda_lo", "lambda_hi", "dcdf_lo", "dcdf_hi", "mp_resid_lo", "mp_resid_hi"],
        "rows": rows,
    }


# ---------------------------------------------------------------------------------------
# studentized range
# ---------------------------------------------------------------------------------------

TUKEY_K = list(range(2, 21))
TUKEY_DF = [2, 5, 10, 30, 120, math.inf]
TUKEY_Q = [0.5, 1.0, 2.0, 3.0, 4.0, 5.0, 6.0, 8.0, 12.0]


def tukey_grid():
    rows = []
    for k in TUKEY_K:
        for df in TUKEY_DF:
            for q in TUKEY_Q:
                rows.append([k, df, q, float(stats.studentized_range.cdf(q, k, df)),
                             float(stats.studentized_range.sf(q, k, df))])
    return {
        "call": {"cdf": "scipy.stats.studentized_range.cdf(q, k, df)",
                 "sf": "scipy.stats.studentized_range.sf(q, k, df) (scipy forms 1 - cdf: absolute accuracy only)"},
        "columns": ["k", "df", "q", "cdf", "sf"],
        "rows": rows,
    }


def tukey_scipy_mpmath_ref():
    """scipy's own mpmath reference values, copied from the scipy install."""
    import json
    import os
    import scipy
    path = os.path.join(os.path.dirname(scipy.__file__), "stats", "tests", "data", "studentized_range_mpmath_ref.json")
    with open(path) as fh:
        data = json.load(fh)
    rows = [[c["src_case"]["k"], c["src_case"]["v"], c["src_case"]["q"], c["mp_result"]] for c in data["cdf_data"]]
    return {
        "call": {"cdf": "mp_result of cdf_data in scipy/stats/tests/data/studentized_range_mpmath_ref.json "
                        f"(scipy {scipy.__version__}, generated there by studentized_range_mpmath_ref.py with mpmath)"},
        "columns": ["k", "df", "q", "cdf"],
        "rows": rows,
    }


def mp_tukey_sf_inf(q, k):
    """P(Q > q) for df = inf at dps 30 with mpmath.quad, in the textbook form
    1 - W(q) = k * int phi(z) (Phi(z)^(k-1) - (Phi(z) - Phi(z - q))^(k-1)) dz."""
    with mp.workdps(30):
        K, Q = mp.mpf(k), _mpf(q)

        def f(z):
            a = mp.ncdf(z)
            return mp.npdf(z) * (a ** (K - 1) - (a - mp.ncdf(z - Q)) ** (K - 1))
        return K * mp.quad(f, [-mp.inf, -8, 0, Q / 2, Q, Q + 8, mp.inf])


def quad_tukey_sf(q, k, df):
    """P(Q > q) for finite df, independent double-precision implementation in the
    textbook order with scipy.integrate.quad (epsabs 0, epsrel 1e-13):
    sf = int_0^inf f_s(s) (1 - W(q s)) ds, f_s the density of sqrt(chi2_df/df), and
    1 - W(w) = k int phi(z) Phi(z)^(k-1) (-expm1((k-1) log1p(-Phi(z-w)/Phi(z)))) dz, which
    keeps relative accuracy in the upper tail (nested mpmath.quad took > 8 minutes a value)."""
    from scipy.integrate import quad

    def upper_range(w):
        def f(z):
            ratio = math.exp(special.log_ndtr(z - w) - special.log_ndtr(z))  # Phi(z-w)/Phi(z)
            factor = 1.0 if ratio >= 1.0 else -math.expm1((k - 1) * math.log1p(-ratio))
            return k * math.exp(-0.5 * z * z) / math.sqrt(2 * math.pi) * special.ndtr(z) ** (k - 1) * factor
        pts = [-math.inf, -8.0, 0.0, w / 2, w, w + 8.0, math.inf]
        return sum(quad(f, a, b, epsabs=0, epsrel=1e-13, limit=200)[0] for a, b in zip(pts, pts[1:]) if b > a)

    lognorm = math.log(2) + (df / 2) * math.log(df / 2) - math.lgamma(df / 2)

    def g(s):
        if s <= 0:
            return 0.0
        return math.exp(lognorm + (df - 1) * math.log(s) - df * s * s / 2) * upper_range(q * s)
    pts = sorted({0.0, 1 / q, 3 / q, 10 / q, 0.3, 1.0, 2.0, 4.0})
    pts.append(math.inf)
    return sum(quad(g, a, b, epsabs=0, epsrel=1e-13, limit=200)[0] for a, b in zip(pts, pts[1:]))


def tukey_tail_grid():
    """Small upper tails, where scipy (1 - cdf) cannot serve. q is placed with the
    Bonferroni bound sf ~ k(k-1) P(T_df > q/sqrt 2) for targets 1e-4, 1e-8, 1e-12.
    Reference: mpmath (df = inf) or the independent quad implementation (finite df);
    for k = 2 also the exact 2 P(T_df > q/sqrt 2), which the generator checks both against."""
    rows = []
    cases = [(2, 2), (2, 10), (2, math.inf), (3, 10), (4, 2), (5, 30), (6, 5), (10, 120), (20, 10), (20, math.inf)]
    for k, df in cases:
        for target in (1e-4, 1e-8, 1e-12):
            tq = stats.norm.isf(target / (k * (k - 1))) if math.isinf(df) else stats.t.isf(target / (k * (k - 1)), df)
            q = float(math.sqrt(2) * tq)
            if math.isinf(df):
                ref, source = float(mp_tukey_sf_inf(q, k)), 0
            else:
                ref, source = quad_tukey_sf(q, k, df), 1
            exact = float("nan")
            if k == 2:
                with mp.workdps(30):
                    x = _mpf(q) / mp.sqrt(2)
                    if math.isinf(df):
                        exact = float(2 * mp.ncdf(-x))
                    else:
                        D = _mpf(df)
                        exact = float(mp.betainc(D / 2, mp.mpf(1) / 2, 0, D / (D + x * x), regularized=True))
                assert abs(ref / exact - 1) < 1e-10, (k, df, q, ref, exact)
            rows.append([k, df, q, ref, source, exact])
    return {
        "call": {"sf_ref": "source 0: mp_tukey_sf_inf(q, k) (mpmath.quad, dps 30, df = inf); source 1: "
                           "quad_tukey_sf(q, k, df) (scipy.integrate.quad, textbook order, epsrel 1e-13) (this file)",
                 "sf_exact": "k = 2 only: 2 P(T_df > q/sqrt 2) = mpmath.betainc(df/2, 1/2, 0, df/(df + q^2/2), "
                             "regularized=True); df = inf: 2 mpmath.ncdf(-q/sqrt 2)"},
        "columns": ["k", "df", "q", "sf_ref", "source", "sf_exact"],
        "rows": rows,
    }


def tukey_quantile_grid():
    rows = []
    for k in (2, 3, 5, 10, 20):
        for df in (2, 5, 10, 30, 120, math.inf):
            for p in (0.05, 0.5, 0.95, 0.99):
                rows.append([k, df, p, float(stats.studentized_range.ppf(p, k, df))])
    return {"call": {"q": "scipy.stats.studentized_range.ppf(p, k, df)"},
            "columns": ["k", "df", "p", "q"], "rows": rows}


def generate():
    out = {
        "normal": normal_grid(),
        "normal_quantile": normal_quantile_grid(),
        "t": t_grid(),
        "chi2": chi2_grid(),
        "f": f_grid(),
        "beta_reg": beta_grid(),
        "gamma_pq": gamma_grid(),
        "ln_gamma": ln_gamma_grid(),
    }
    out.update(quantile_grid())
    out["ncf"] = ncf_grid()
    out["ncf_interval"] = ncf_interval_grid()
    out["tukey"] = tukey_grid()
    out["tukey_scipy_mpmath_ref"] = tukey_scipy_mpmath_ref()
    out["tukey_tail"] = tukey_tail_grid()
    out["tukey_quantile"] = tukey_quantile_grid()
    out["_scipy_doubtful"] = scipy_doubtful(out)
    return out


def scipy_doubtful(grids):
    """Every record where scipy disagrees with mpmath beyond the check's threshold (the Rust
    tests then compare with mpmath only), listed by grid with the scipy and mpmath values."""
    notes = {
        "_about": "rows whose *_scipy_ok flag is 0; threshold 5e-13 relative for central "
                  "functions, 1e-12 in x for quantiles, Overrides 3 target for the noncentral F. "
                  "Also: scipy's studentized_range.sf is 1 - cdf (absolute accuracy only), so its "
                  "small tails are checked against mpmath / an independent quadrature instead.",
    }
    for name, g in grids.items():
        if not isinstance(g, dict) or "columns" not in g:
            continue
        cols = g["columns"]
        flags = [i for i, c in enumerate(cols) if c.endswith("_scipy_ok")]
        bad = []
        for r in g["rows"]:
            for i in flags:
                if r[i] != 1:
                    col = cols[i][: -len("_scipy_ok")]
                    record = {c: r[j] for j, c in enumerate(cols) if not c.endswith("_scipy_ok")}
                    bad.append({"column": col, "record": record})
        if bad:
            notes[name] = bad
    return notes
