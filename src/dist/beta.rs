//! The regularized incomplete beta function I_x(a, b) and its complement.
//!
//! The F and t distributions (and the noncentral F) are all incomplete betas, so this is
//! the workhorse of the module. It is written for relative accuracy in *both* tails and
//! for shape parameters up to about 10⁶, where statrs 0.19 fails (METHODS Appendix A):
//!
//! * The argument travels as [`BetaArg`], carrying x, y = 1 − x, ln x and ln y each to
//!   full precision. Callers that know the argument as a ratio (F: y/x = d1·F/d2; t:
//!   y/x = t²/ν) build it without ever forming 1 − x in floating point, so a tail
//!   probability of 1e−250 does not lose digits to the rounding of x near 1.
//! * The prefactor x^a y^b / B(a, b) is computed as in DiDonato & Morris (1992, ACM TOMS
//!   18:360–373, function BRCOMP): for large a and b via Stirling's series with the
//!   deviation λ = a − (a + b)x in double-double arithmetic and t − ln(1 + t) terms, so
//!   nothing of size a·ln x cancels; for one large parameter via a cancellation-free
//!   ln Γ(a + b) − ln Γ(b); otherwise directly.
//! * The remaining factor is the classical continued fraction (Press et al. 2007,
//!   Numerical Recipes 3rd ed. §6.4) in its even contraction, with every denominator
//!   written through λ so that nothing of the form 1 − x·(…) is evaluated (the same
//!   device as DiDonato & Morris's BFRAC), by the modified Lentz method. It is used on
//!   whichever side of x = (a + 1)/(a + b + 2) it converges quickly; the other tail is
//!   the complement. It needs O(√max(a, b)) terms, a few hundred at a = b = 10⁶.

use super::gamma::{ln_gamma, rlog1, stirling_correction, EPS, LN_SQRT_2PI, MAX_TERMS, TINY};
use super::solve::{solve_increasing, SolveScale};

/// An argument of I_x(a, b), with y = 1 − x and both logarithms, each to full precision.
#[derive(Clone, Copy, Debug)]
pub(crate) struct BetaArg {
    /// x ∈ [0, 1].
    pub x: f64,
    /// y = 1 − x.
    pub y: f64,
    /// ln x.
    pub ln_x: f64,
    /// ln y.
    pub ln_y: f64,
}

impl BetaArg {
    /// From x itself (y = 1 − x is exact for x ≥ ½).
    pub(crate) fn from_x(x: f64) -> Self {
        let y = 1.0 - x;
        let ln_y = if x >= 0.5 { y.ln() } else { (-x).ln_1p() };
        BetaArg { x, y, ln_x: x.ln(), ln_y }
    }

    /// From the odds w = x/y ∈ [0, ∞]: x = w/(1 + w), y = 1/(1 + w).
    pub(crate) fn from_odds(w: f64) -> Self {
        if w == f64::INFINITY {
            return BetaArg { x: 1.0, y: 0.0, ln_x: 0.0, ln_y: f64::NEG_INFINITY };
        }
        let ln_x = if w < 1.0 { w.ln() - w.ln_1p() } else { -(1.0 / w).ln_1p() };
        BetaArg { x: w / (1.0 + w), y: 1.0 / (1.0 + w), ln_x, ln_y: -w.ln_1p() }
    }

    /// From ln w, the log-odds: for odds beyond the floating-point range (t with
    /// x = 1e250 has odds 1e−500), where x or y underflows but its logarithm is kept.
    pub(crate) fn from_ln_odds(lw: f64) -> Self {
        if lw.is_nan() {
            return BetaArg { x: f64::NAN, y: f64::NAN, ln_x: f64::NAN, ln_y: f64::NAN };
        }
        let (ln_x, ln_y) = if lw < 0.0 {
            let s = lw.exp().ln_1p();
            (lw - s, -s)
        } else {
            let s = (-lw).exp().ln_1p();
            (-s, -lw - s)
        };
        BetaArg { x: ln_x.exp(), y: ln_y.exp(), ln_x, ln_y }
    }

    /// From a ratio w = x/y given as a product/quotient that may leave the floating-point
    /// range: `w` as computed and `ln_w` to compute ln w when w is not in [1e−300, 1e300].
    pub(crate) fn from_odds_or_ln<L: FnOnce() -> f64>(w: f64, ln_w: L) -> Self {
        if (1e-300..=1e300).contains(&w) {
            BetaArg::from_odds(w)
        } else {
            BetaArg::from_ln_odds(ln_w())
        }
    }

    /// The argument of I_y(b, a), for the symmetry I_x(a, b) = 1 − I_y(b, a).
    pub(crate) fn swap(self) -> Self {
        BetaArg { x: self.y, y: self.x, ln_x: self.ln_y, ln_y: self.ln_x }
    }
}

/// Error-free product: a·b = hi + lo exactly.
fn two_prod(a: f64, b: f64) -> (f64, f64) {
    let hi = a * b;
    (hi, a.mul_add(b, -hi))
}

/// Error-free sum: a + b = s + e exactly (Knuth).
fn two_sum(a: f64, b: f64) -> (f64, f64) {
    let s = a + b;
    let bb = s - a;
    (s, (a - (s - bb)) + (b - bb))
}

/// λ = a − (a + b)x = (a + b)y − b in double-double, from the smaller of x and y.
fn deviation(a: f64, b: f64, arg: &BetaArg) -> f64 {
    // Σ of four terms with one rounding at the end: products split exactly, sums by two_sum.
    let (t1, t2, t3) = if arg.x <= arg.y {
        let (ax, ax_lo) = two_prod(a, arg.x);
        let (bx, bx_lo) = two_prod(b, arg.x);
        ((a, -ax, -bx), -ax_lo, -bx_lo)
    } else {
        let (ay, ay_lo) = two_prod(a, arg.y);
        let (by, by_lo) = two_prod(b, arg.y);
        ((ay, by, -b), ay_lo, by_lo)
    };
    let (s1, e1) = two_sum(t1.0, t1.1);
    let (s2, e2) = two_sum(s1, t1.2);
    s2 + (e1 + e2 + t2 + t3)
}

/// a·(u − ln(1 + u)) for u = x/x₀ − 1, x₀ = a/(a + b); `lin` = a·u, `ln_ratio` = ln(x/x₀).
fn stirling_term(a: f64, u: f64, lin: f64, ln_ratio: f64) -> f64 {
    if u.abs() <= 0.5 {
        a * rlog1(u)
    } else {
        lin - a * ln_ratio
    }
}

/// ln[x^a y^b / B(a, b)] for a, b > 0 and 0 < x < 1 (DiDonato & Morris 1992, BRCOMP).
pub(crate) fn ln_beta_prefix(a: f64, b: f64, arg: &BetaArg) -> f64 {
    let (lo, hi) = if a < b { (a, b) } else { (b, a) };
    if lo >= 10.0 {
        // x^a y^b / B = √(ab/(2π(a+b))) · exp(−a·φ(u_a) − b·φ(u_b) + δ(a+b) − δ(a) − δ(b)),
        // φ(u) = u − ln(1 + u), u_a = −λ/a, u_b = λ/b.
        let lambda = deviation(a, b, arg);
        let ta = stirling_term(a, -lambda / a, -lambda, arg.ln_x + (b / a).ln_1p());
        let tb = stirling_term(b, lambda / b, lambda, arg.ln_y + (a / b).ln_1p());
        let corr = stirling_correction(a + b) - stirling_correction(a) - stirling_correction(b);
        let scale = 0.5 * (a / (a + b)).ln() + 0.5 * b.ln() - LN_SQRT_2PI;
        return -(ta + tb) + corr + scale;
    }
    let ln_beta = if hi >= 10.0 {
        // ln Γ(lo + hi) − ln Γ(hi) without cancellation.
        let d = (hi - 0.5) * (lo / hi).ln_1p() + lo * (lo + hi).ln() - lo + stirling_correction(lo + hi)
            - stirling_correction(hi);
        ln_gamma(lo) - d
    } else {
        ln_gamma(a) + ln_gamma(b) - ln_gamma(a + b)
    };
    a * arg.ln_x + b * arg.ln_y - ln_beta
}

/// Continued fraction of I_x(a, b)·a·B(a, b)/(x^a y^b), converging quickly for
/// x < (a + 1)/(a + b + 2).
///
/// This is the even contraction of the classical fraction 1/(1 + d₁/(1 + d₂/(1 + …)))
/// (Numerical Recipes `betacf`): G = B₀ + A₁/(B₁ + A₂/(B₂ + …)) with B₀ = 1 + d₁,
/// B_m = 1 + d_{2m} + d_{2m+1}, A_m = −d_{2m−1}d_{2m}. Written out with the deviation
/// λ = a − (a + b)x, the denominators are
/// B_m = [(a + m)(λ + m·y) + a(2m + 1) + m(3m + 2)]/((a + 2m)(a + 2m + 1))
///       + m(b − m)x/((a + 2m − 1)(a + 2m)),
/// which never forms 1 − x·(…) in floating point: the classical form loses about
/// log₁₀(1/y) digits when x is near 1 and a ≫ b (t and F with 10⁶ df). The same idea
/// is DiDonato & Morris's BFRAC. Evaluated by the modified Lentz method.
fn beta_cf(a: f64, b: f64, arg: &BetaArg, lambda: f64) -> f64 {
    let (x, y) = (arg.x, arg.y);
    let mut f = (1.0 + lambda) / (a + 1.0);
    if f.abs() < TINY {
        f = TINY;
    }
    let mut c = f;
    let mut d = 0.0;
    let cap = (2000.0 + 25.0 * a.max(b).sqrt()).min(MAX_TERMS) as usize;
    for m in 1..=cap {
        let m = m as f64;
        let a2m = a + 2.0 * m;
        let num = (a + m - 1.0) * (a + b + m - 1.0) * m * (b - m) * x * x;
        let am = num / ((a2m - 2.0) * (a2m - 1.0) * (a2m - 1.0) * a2m);
        let bm = ((a + m) * (lambda + m * y) + a * (2.0 * m + 1.0) + m * (3.0 * m + 2.0)) / (a2m * (a2m + 1.0))
            + m * (b - m) * x / ((a2m - 1.0) * a2m);
        d = bm + am * d;
        if d.abs() < TINY {
            d = TINY;
        }
        c = bm + am / c;
        if c.abs() < TINY {
            c = TINY;
        }
        d = 1.0 / d;
        let del = c * d;
        f *= del;
        if (del - 1.0).abs() < EPS {
            break;
        }
    }
    1.0 / f
}

/// (I_x(a, b), 1 − I_x(a, b)) for finite a, b > 0 and a valid argument; the small one of
/// the pair is computed directly, so both keep relative accuracy.
pub(crate) fn beta_pair(a: f64, b: f64, arg: &BetaArg) -> (f64, f64) {
    if arg.ln_x == f64::NEG_INFINITY {
        return (0.0, 1.0);
    }
    if arg.ln_y == f64::NEG_INFINITY {
        return (1.0, 0.0);
    }
    if arg.x < (a + 1.0) / (a + b + 2.0) {
        let lambda = deviation(a, b, arg);
        let s = (ln_beta_prefix(a, b, arg).exp() * beta_cf(a, b, arg, lambda) / a).min(1.0);
        (s, 1.0 - s)
    } else {
        let sw = arg.swap();
        let lambda = deviation(b, a, &sw);
        let s = (ln_beta_prefix(b, a, &sw).exp() * beta_cf(b, a, &sw, lambda) / b).min(1.0);
        (1.0 - s, s)
    }
}

fn shapes_ok(a: f64, b: f64) -> bool {
    a > 0.0 && b > 0.0 && a.is_finite() && b.is_finite()
}

/// Regularized incomplete beta function I_x(a, b) = B(x; a, b)/B(a, b).
///
/// Domain: a > 0, b > 0 (finite), 0 ≤ x ≤ 1. Algorithm: DiDonato & Morris (1992)
/// style prefactor plus the Lentz continued fraction on the fast side, the other side by
/// the symmetry I_x(a, b) = 1 − I_{1−x}(b, a) (see the module notes). Relative error about
/// 1e−13 against mpmath on the tested grid, including a = b = 10⁶.
/// Returns NaN for parameters outside the domain or NaN input.
pub fn beta_reg(a: f64, b: f64, x: f64) -> f64 {
    if !shapes_ok(a, b) || !(0.0..=1.0).contains(&x) {
        return f64::NAN;
    }
    beta_pair(a, b, &BetaArg::from_x(x)).0
}

/// Lower-tail quantile of the Beta(a, b) distribution: the x with I_x(a, b) = p.
///
/// Used for Clopper–Pearson intervals (the bounds are Beta quantiles). Algorithm: solves
/// ln I_x(a, b) = ln p (or ln(1 − I) = ln(1 − p) for p > ½, so both tails keep relative
/// accuracy) for the logit u = ln(x/(1 − x)) by bracketing and Brent's method, to about
/// 1e−15 in u. Conventions: p = 0 gives 0 and p = 1 gives 1.
/// Returns NaN for a ≤ 0, b ≤ 0, non-finite shapes, p outside [0, 1] or NaN.
pub fn beta_quantile(p: f64, a: f64, b: f64) -> f64 {
    if !shapes_ok(a, b) || !(0.0..=1.0).contains(&p) {
        return f64::NAN;
    }
    if p == 0.0 {
        return 0.0;
    }
    if p == 1.0 {
        return 1.0;
    }
    let lower = p <= 0.5;
    let target = if lower { p.ln() } else { (1.0 - p).ln() };
    let g = |u: f64| {
        let (i, ic) = beta_pair(a, b, &BetaArg::from_odds(u.exp()));
        if lower {
            i.ln() - target
        } else {
            target - ic.ln()
        }
    };
    // Start at the logit of the mean.
    let u0 = (a / b).ln();
    let u = solve_increasing(g, u0, 1.0, SolveScale::Log);
    let e = (-u).exp();
    1.0 / (1.0 + e)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn uniform_and_closed_forms() {
        // I_x(1, 1) = x; I_x(a, 1) = x^a; I_x(1, b) = 1 − (1 − x)^b.
        for &x in &[1e-10, 0.1, 0.5, 0.9, 1.0 - 1e-10] {
            assert!((beta_reg(1.0, 1.0, x) / x - 1.0).abs() < 1e-14);
            assert!((beta_reg(3.5, 1.0, x) / x.powf(3.5) - 1.0).abs() < 1e-13);
            let want = -(4.0 * (-x).ln_1p()).exp_m1();
            assert!((beta_reg(1.0, 4.0, x) / want - 1.0).abs() < 1e-13);
        }
    }

    #[test]
    fn deviation_is_exact_for_representable_cases() {
        let arg = BetaArg::from_x(0.5);
        assert_eq!(deviation(1e6, 1e6, &arg), 0.0);
        let arg = BetaArg::from_x(0.25);
        assert_eq!(deviation(3.0, 5.0, &arg), 1.0);
    }

    #[test]
    fn odds_constructor_matches_x_constructor() {
        let a = BetaArg::from_odds(0.25);
        let b = BetaArg::from_x(0.2);
        assert!((a.x - b.x).abs() < 1e-16 && (a.y - b.y).abs() < 1e-16);
        assert!((a.ln_x - b.ln_x).abs() < 1e-15 && (a.ln_y - b.ln_y).abs() < 1e-15);
    }

    #[test]
    fn quantile_inverts() {
        for &(a, b) in &[(0.5, 10.0), (3.0, 20.0), (100.0, 900.0)] {
            for &p in &[1e-50, 0.025, 0.5, 0.975] {
                let x = beta_quantile(p, a, b);
                let back = beta_reg(a, b, x);
                assert!((back / p - 1.0).abs() < 1e-11, "a {a} b {b} p {p}: {back}");
            }
        }
    }
}
