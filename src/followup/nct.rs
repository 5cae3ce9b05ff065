//! Hedges' g of a contrast with its noncentral-t interval, for the classical pairwise
//! comparisons and planned contrasts (the noncentral t itself is in [`crate::dist`]).

use crate::dist;

/// Hedges' (1981, Journal of Educational Statistics 6:107–128) exact small-sample
/// factor J(ν) = Γ(ν/2)/(√(ν/2)·Γ((ν − 1)/2)), so that g = J·d is unbiased for δ.
/// NaN for ν ≤ 1.
pub fn hedges_j(df: f64) -> f64 {
    if df.is_nan() || df <= 1.0 {
        return f64::NAN;
    }
    (dist::ln_gamma(df / 2.0) - 0.5 * (df / 2.0).ln() - dist::ln_gamma((df - 1.0) / 2.0)).exp()
}

/// A standardized contrast with its interval.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct StandardizedContrast {
    /// g = J(ν)·ψ̂/s, s the pooled standard deviation.
    pub g: f64,
    /// Lower end: J(ν)·δ_L·k.
    pub ci_low: f64,
    /// Upper end: J(ν)·δ_U·k.
    pub ci_high: f64,
}

/// Hedges' g of a contrast ψ̂ = ℓ'μ̂ standardized by the pooled within-cell standard
/// deviation s = √MSE (ν = N − C degrees of freedom), with its interval. With
/// k = √(Σ_c ℓ_c²/n_c) the t statistic is t = ψ̂/(s·k) ~ T'_ν(δ/k·…): its noncentrality is
/// ψ/(σk), so the interval [δ_L, δ_U] of [`dist::nct_delta_interval`] gives ψ/σ ∈ [δ_L·k, δ_U·k];
/// both ends are multiplied by the same J(ν) as the point estimate so that g lies inside
/// its interval (the convention of e.g. the effect-size literature that reports g with a
/// noncentral-t interval; Hedges & Olkin 1985, Statistical Methods for Meta-Analysis,
/// Academic Press, ch. 5 [from memory]). For two cells, k = √(1/n₁ + 1/n₂).
/// `None` when s ≤ 0, ν ≤ 1 or the interval cannot be found.
pub fn standardized_contrast(estimate: f64, s: f64, k: f64, df: f64, level: f64) -> Option<StandardizedContrast> {
    let j = hedges_j(df);
    if !(s > 0.0 && k > 0.0 && j.is_finite() && estimate.is_finite()) {
        return None;
    }
    let t = estimate / (s * k);
    let (lo, hi) = dist::nct_delta_interval(t, df, level)?;
    Some(StandardizedContrast { g: j * estimate / s, ci_low: j * lo * k, ci_high: j * hi * k })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn hedges_j_approximation() {
        // J(ν) ≈ 1 − 3/(4ν − 1) (Hedges 1981), good to about 1e−4 at ν = 20.
        assert!((hedges_j(20.0) - (1.0 - 3.0 / 79.0)).abs() < 2e-4);
        assert!(hedges_j(1.0).is_nan());
    }
}
