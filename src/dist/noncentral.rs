//! The noncentral F distribution and the Steiger (2004) interval for its noncentrality.
//!
//! quorum needs the noncentral F only for the confidence interval of partial η²
//! (METHODS §1.4), but there it is inverted in λ, so the cdf must be smooth and accurate
//! in λ as well as in x. statrs has no noncentral F, and the `cdflib` port is poor
//! (METHODS Appendix A), so it is written here as the classical Poisson mixture
//!
//!   P(F' ≤ x) = Σ_j e^{−μ} μ^j/j! · I_z(d1/2 + j, d2/2),  μ = λ/2, z = d1x/(d1x + d2),
//!
//! (Johnson, Kotz & Balakrishnan 1995, *Continuous Univariate Distributions* vol. 2,
//! ch. 30) summed outward from the Poisson mode, as in Ding (1992, Applied Statistics
//! 41:478–482) and Benton & Krishnamoorthy (2003, CSDA 43:249–267): one incomplete beta
//! at the mode, then the exact recurrences I_z(a + 1, b) = I_z(a, b) − T(a),
//! T(a + 1) = T(a)·z(a + b)/(a + 1), in the direction in which each is a sum of
//! positive terms or loses at most ε of the mode term. The upper tail is summed as its
//! own mixture of 1 − I, never as 1 − cdf. Summation stops when the Poisson weight left
//! on that side, bounded geometrically, times the largest term it could multiply, is
//! below 1e−17 of the running sum, so both tails keep relative accuracy. df2 = ∞ is the
//! same mixture over the regularized gamma P(d1/2 + j, d1x/2) (noncentral χ²/d1).

use super::beta::{beta_pair, ln_beta_prefix, BetaArg};
use super::central::f_cdf;
use super::gamma::{gamma_pq, ln_gamma, ln_gamma_prefix, rlog1, stirling_correction};
use super::solve::zeroin;
use std::f64::consts::PI;

/// Relative size of the neglected part of either mixture.
const SUM_TOL: f64 = 1e-17;
/// Contributions below this are dropped outright (and keep the loops out of subnormals).
const SUM_FLOOR: f64 = 1e-300;
/// Largest supported noncentrality: the mixture needs about 80·√(λ/2) terms, 10⁷ here.
pub(crate) const MAX_LAMBDA: f64 = 1e10;

/// Poisson probability e^{−μ} μ^j / j! for j ≥ 0, without cancellation for large μ:
/// ln w = −j·rlog1((μ − j)/j) − ½ ln(2πj) − δ(j) (δ = Stirling's correction).
fn poisson_pmf(j: f64, mu: f64) -> f64 {
    if j == 0.0 {
        return (-mu).exp();
    }
    if j < 10.0 {
        return (j * mu.ln() - mu - ln_gamma(j + 1.0)).exp();
    }
    (-j * rlog1((mu - j) / j) - 0.5 * (2.0 * PI * j).ln() - stirling_correction(j)).exp()
}

/// One mixture component family: the value pair (I(a), 1 − I(a)) at the start, the
/// term T(a) with I(a + 1) = I(a) − T(a), and the ratios T(a ± 1)/T(a).
struct Family<U: Fn(f64) -> f64, D: Fn(f64) -> f64> {
    a0: f64,
    i0: f64,
    c0: f64,
    t0: f64,
    up: U,
    down: D,
}

/// Σ_j w_j·(I_j, 1 − I_j) with w_j Poisson(μ) weights and shape a_j = a0 + (j − j0).
fn mixture<U: Fn(f64) -> f64, D: Fn(f64) -> f64>(mu: f64, j0: f64, fam: Family<U, D>) -> (f64, f64) {
    let w0 = poisson_pmf(j0, mu);
    let mut cdf = w0 * fam.i0;
    let mut sf = w0 * fam.c0;
    // Upward: I decreases, 1 − I increases to at most 1.
    let (mut j, mut a, mut i, mut c, mut t, mut w) = (j0, fam.a0, fam.i0, fam.c0, fam.t0, w0);
    let cap = (j0 + 50.0 * mu.sqrt() + 2000.0) as usize;
    for _ in 0..cap {
        i = (i - t).max(0.0);
        c = (c + t).min(1.0);
        t *= (fam.up)(a);
        a += 1.0;
        w *= mu / (j + 1.0);
        j += 1.0;
        cdf += w * i;
        sf += w * c;
        // Poisson weight beyond j: ≤ w·ρ/(1 − ρ), ρ = μ/(j + 2), once j + 2 > μ.
        let rho = mu / (j + 2.0);
        if rho < 1.0 {
            let rest = w * rho / (1.0 - rho);
            if (rest * i <= SUM_TOL * cdf && rest <= SUM_TOL * sf) || rest < SUM_FLOOR {
                break;
            }
        }
        if w == 0.0 {
            break;
        }
    }
    // Downward: I increases to at most 1, 1 − I decreases.
    let (mut j, mut a, mut i, mut c, mut t, mut w) = (j0, fam.a0, fam.i0, fam.c0, fam.t0, w0);
    while j >= 1.0 {
        t *= (fam.down)(a);
        a -= 1.0;
        i = (i + t).min(1.0);
        c = (c - t).max(0.0);
        w *= j / mu;
        j -= 1.0;
        cdf += w * i;
        sf += w * c;
        // Poisson weight below j: ≤ w·ρ/(1 − ρ), ρ = j/μ < 1.
        let rho = j / mu;
        if rho < 1.0 {
            let rest = w * rho / (1.0 - rho);
            if (rest <= SUM_TOL * cdf && rest * c <= SUM_TOL * sf) || rest < SUM_FLOOR {
                break;
            }
        }
    }
    (cdf.min(1.0), sf.min(1.0))
}

/// (cdf, sf) of the noncentral F; NaN pair for invalid input.
fn ncf_pair(x: f64, df1: f64, df2: f64, lambda: f64) -> (f64, f64) {
    let bad = |v: f64| v.is_nan() || v <= 0.0;
    if x.is_nan() || bad(df1) || df1 == f64::INFINITY || bad(df2) || lambda.is_nan() {
        return (f64::NAN, f64::NAN);
    }
    if !(0.0..=MAX_LAMBDA).contains(&lambda) {
        return (f64::NAN, f64::NAN);
    }
    if x <= 0.0 {
        return (0.0, 1.0);
    }
    if x == f64::INFINITY {
        return (1.0, 0.0);
    }
    let mu = 0.5 * lambda;
    let j0 = mu.floor();
    if df2 == f64::INFINITY {
        // Noncentral χ²_{df1}(λ)/df1 at x: Σ w_j P(df1/2 + j, df1·x/2).
        let z = 0.5 * df1 * x;
        if z == f64::INFINITY {
            return (1.0, 0.0);
        }
        if z * mu.max(1.0) < 1e-17 {
            // Each j ≥ 1 term is below μz·(term j − 1): only j = 0 counts (and the
            // downward recurrence, which divides by z, is not needed).
            let cdf = (-mu).exp() * gamma_pq(0.5 * df1, z).0;
            return (cdf, 1.0 - cdf);
        }
        let a0 = 0.5 * df1 + j0;
        let (i0, c0) = gamma_pq(a0, z);
        let t0 = (ln_gamma_prefix(a0, z).exp() / a0).min(1.0);
        let fam = Family { a0, i0, c0, t0, up: |a: f64| z / (a + 1.0), down: |a: f64| a / z };
        return mixture(mu, j0, fam);
    }
    // Incomplete-beta argument z = d1x/(d1x + d2), from its odds d1x/d2.
    let r = df1 * x / df2;
    let arg = BetaArg::from_odds_or_ln(r, || df1.ln() + x.ln() - df2.ln());
    let b = 0.5 * df2;
    if arg.x * (0.5 * df1 + b) * mu.max(1.0) < 1e-17 {
        // Tiny z (possibly below the double range; its logarithm is kept): each j ≥ 1 term
        // is below μ·z·(a + b) times the one before, so only j = 0 counts, and the
        // downward recurrence (which divides by z) is not needed.
        let (i0, _) = beta_pair(0.5 * df1, b, &arg);
        let cdf = (-mu).exp() * i0;
        return (cdf, 1.0 - cdf);
    }
    let a0 = 0.5 * df1 + j0;
    let (i0, c0) = beta_pair(a0, b, &arg);
    let t0 = (ln_beta_prefix(a0, b, &arg).exp() / a0).min(1.0);
    let zx = arg.x;
    let fam = Family { a0, i0, c0, t0, up: |a: f64| zx * (a + b) / (a + 1.0), down: |a: f64| a / (zx * (a - 1.0 + b)) };
    mixture(mu, j0, fam)
}

/// Noncentral F distribution function P(F'(df1, df2, λ) ≤ x).
///
/// Poisson mixture of incomplete betas, Σ_j e^{−λ/2}(λ/2)^j/j! · I_z(df1/2 + j, df2/2),
/// z = df1·x/(df1·x + df2), summed outward from the Poisson mode with exact
/// recurrences until the neglected Poisson weight (times the largest term it could
/// carry) is below 1e−17 of the sum (see the module notes). df2 = ∞ gives the
/// noncentral χ²_{df1}(λ)/df1 distribution. λ = 0 is the central F. Accuracy: relative
/// 1e−9 or better where the cdf exceeds 1e−10, absolute 1e−14 elsewhere (METHODS
/// Overrides 3; tested against scipy `ncf`/`ncx2` and a direct mpmath sum).
/// Returns NaN for df1 ≤ 0, df1 = ∞, df2 ≤ 0, λ < 0, λ > 10¹⁰ (beyond that the mixture
/// would need more than 10⁷ terms; quorum's effect sizes stay far below) or NaN input.
pub fn ncf_cdf(x: f64, df1: f64, df2: f64, lambda: f64) -> f64 {
    ncf_pair(x, df1, df2, lambda).0
}

/// Noncentral F survival function P(F'(df1, df2, λ) > x), summed directly as the
/// mixture Σ_j w_j·I_{1−z}(df2/2, df1/2 + j) (never as 1 − cdf). Conventions, domain and
/// accuracy as [`ncf_cdf`]. Returns NaN for invalid input.
pub fn ncf_sf(x: f64, df1: f64, df2: f64, lambda: f64) -> f64 {
    ncf_pair(x, df1, df2, lambda).1
}

/// Confidence interval for the noncentrality λ of an observed F (Steiger 2004,
/// Psychological Methods 9:164–182; METHODS §1.4), inverting the noncentral F in λ.
///
/// With α = 1 − level: λ_L solves P(F'(d1, d2, λ) ≤ F_obs) = 1 − α/2 and λ_U solves
/// it = α/2 (the cdf decreases in λ). If the central P(F(d1, d2) ≤ F_obs) < 1 − α/2
/// then λ_L = 0, and if it is < α/2 then λ_U = 0 too. Each root is bracketed on [0, hi]
/// with hi doubled until the cdf falls below the target, then found by Brent's method
/// to a relative tolerance of 1e−13 in λ. The partial η² interval follows by
/// η² = λ/(λ + N) (the caller's choice of map).
///
/// Returns `Some((0, 0))` for F_obs = 0; `None` for non-finite or negative F_obs, df1
/// not in (0, ∞), df2 ≤ 0 (df2 = ∞ is allowed), level outside (0, 1), or if no finite
/// bracket exists (λ would exceed 10¹⁰, the supported range of [`ncf_cdf`]).
pub fn ncf_lambda_interval(f_obs: f64, df1: f64, df2: f64, level: f64) -> Option<(f64, f64)> {
    let df_ok = df1 > 0.0 && df1.is_finite() && df2 > 0.0;
    if !f_obs.is_finite() || f_obs < 0.0 || !df_ok {
        return None;
    }
    if !(level > 0.0 && level < 1.0) {
        return None;
    }
    if f_obs == 0.0 {
        return Some((0.0, 0.0));
    }
    let alpha = 1.0 - level;
    let p0 = f_cdf(f_obs, df1, df2);
    if p0.is_nan() {
        return None;
    }
    let root = |target: f64| -> Option<f64> {
        if p0 < target {
            return Some(0.0);
        }
        let g = |lam: f64| ncf_cdf(f_obs, df1, df2, lam) - target;
        let mut hi = (2.0 * df1 * f_obs).max(1.0);
        let mut g_hi = g(hi);
        let mut lo = 0.0;
        let mut g_lo = p0 - target;
        let mut steps = 0;
        while g_hi > 0.0 {
            lo = hi;
            g_lo = g_hi;
            hi *= 2.0;
            g_hi = g(hi);
            steps += 1;
            if steps > 1000 || hi > 1e300 || g_hi.is_nan() {
                return None;
            }
        }
        let lam = zeroin(&g, lo, hi, g_lo, g_hi, 1e-300, 1e-13);
        if lam.is_nan() {
            None
        } else {
            Some(lam.max(0.0))
        }
    };
    let lower = root(1.0 - 0.5 * alpha)?;
    let upper = root(0.5 * alpha)?;
    Some((lower, upper))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::dist::{chi2_sf, f_sf};

    #[test]
    fn poisson_pmf_matches_direct_form() {
        for &(j, mu) in &[(0.0, 3.0), (3.0, 3.5), (25.0, 20.0), (250.0, 250.3)] {
            let direct = (j * f64::ln(mu) - mu - ln_gamma(j + 1.0)).exp();
            assert!((poisson_pmf(j, mu) / direct - 1.0).abs() < 1e-12, "j {j} mu {mu}");
        }
    }

    #[test]
    fn zero_noncentrality_is_central() {
        for &x in &[0.1, 1.0, 4.0, 30.0] {
            assert!((ncf_sf(x, 3.0, 20.0, 0.0) / f_sf(x, 3.0, 20.0) - 1.0).abs() < 1e-13);
            let chi = chi2_sf(3.0 * x, 3.0);
            assert!((ncf_sf(x, 3.0, f64::INFINITY, 0.0) / chi - 1.0).abs() < 1e-13);
        }
    }

    #[test]
    fn tails_add_to_one() {
        for &(x, lam) in &[(0.5, 1.0), (2.0, 10.0), (8.0, 100.0), (1.0, 400.0)] {
            let (c, s) = ncf_pair(x, 4.0, 30.0, lam);
            assert!((c + s - 1.0).abs() < 1e-14, "x {x} lambda {lam}: {c} + {s}");
        }
    }

    #[test]
    fn extreme_arguments_stay_consistent() {
        // z = d1x/(d1x + d2) below the double range, with a small df1 so the cdf is not tiny.
        let (c, s) = ncf_pair(1e-320, 0.02, 10.0, 4.0);
        let central = crate::dist::f_cdf(1e-320, 0.02, 10.0);
        assert!((c / ((-2.0f64).exp() * central) - 1.0).abs() < 1e-12, "{c} {central}");
        assert!((c + s - 1.0).abs() < 1e-15);
        // 1 − z below the double range: the upper tail is summed from logarithms.
        let (c, s) = ncf_pair(1e300, 3.0, 0.02, 4.0);
        assert!(s > 0.0 && s < 1.0 && (c + s - 1.0).abs() < 1e-15, "{c} {s}");
    }

    #[test]
    fn interval_edge_cases() {
        assert_eq!(ncf_lambda_interval(0.0, 1.0, 33.0, 0.95), Some((0.0, 0.0)));
        assert_eq!(ncf_lambda_interval(f64::NAN, 1.0, 33.0, 0.95), None);
        assert_eq!(ncf_lambda_interval(f64::INFINITY, 1.0, 33.0, 0.95), None);
        assert_eq!(ncf_lambda_interval(2.0, 1.0, 33.0, 1.5), None);
        // A tiny F gives a central cdf below α/2: both limits are 0.
        assert_eq!(ncf_lambda_interval(1e-6, 2.0, 33.0, 0.95), Some((0.0, 0.0)));
    }
}
