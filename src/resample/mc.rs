//! Monte Carlo p-values and their error (METHODS §3.3; DESIGN.md "Monte Carlo honesty").
//!
//! p = (1 + b)/(1 + B) (Phipson & Smyth 2010, Statistical Applications in Genetics and
//! Molecular Biology 9(1):39), its Monte Carlo standard error √(p̂(1 − p̂)/B) with
//! p̂ = b/B, and the 99% Clopper–Pearson (1934, Biometrika 26:404–413) interval of the
//! exceedance probability. A decision is `undetermined` when α lies inside that interval.

use crate::dist;
use crate::results::{Decision, MonteCarlo};

/// Level of the Clopper–Pearson interval used for decisions.
pub const MC_INTERVAL_LEVEL: f64 = 0.99;

/// Relative tolerance for "at least as large as observed": a resampled statistic counts
/// when T* ≥ T_obs·(1 − 1e-10), which guards against floating-point ties (METHODS §3.3).
pub const TIE_TOLERANCE: f64 = 1e-10;

/// True when a resampled statistic counts as an exceedance of the observed one.
#[inline]
pub fn exceeds(resampled: f64, observed: f64) -> bool {
    resampled >= observed * (1.0 - TIE_TOLERANCE) || (observed <= 0.0 && resampled >= observed)
}

/// Counts of a Monte Carlo test.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct McCount {
    /// Resamples drawn, B.
    pub resamples: u64,
    /// Resamples at least as extreme as observed, b.
    pub exceedances: u64,
}

impl McCount {
    /// p = (1 + b)/(1 + B).
    pub fn p(&self) -> f64 {
        (1 + self.exceedances) as f64 / (1 + self.resamples) as f64
    }

    /// √(p̂(1 − p̂)/B), p̂ = b/B.
    pub fn se(&self) -> f64 {
        let b = self.resamples as f64;
        let ph = self.exceedances as f64 / b;
        (ph * (1.0 - ph) / b).sqrt()
    }

    /// Clopper–Pearson interval of the exceedance probability at `level`:
    /// [Beta_{α/2}(b, B − b + 1), Beta_{1−α/2}(b + 1, B − b)], with 0 and 1 at the edges.
    pub fn clopper_pearson(&self, level: f64) -> (f64, f64) {
        let (b, n) = (self.exceedances as f64, self.resamples as f64);
        let a = 1.0 - level;
        let lo = if self.exceedances == 0 { 0.0 } else { dist::beta_quantile(a / 2.0, b, n - b + 1.0) };
        let hi =
            if self.exceedances == self.resamples { 1.0 } else { dist::beta_quantile(1.0 - a / 2.0, b + 1.0, n - b) };
        (lo, hi)
    }

    /// True when α lies inside the 99% interval, so more resamples are needed to decide.
    pub fn ambiguous(&self, alpha: f64) -> bool {
        let (lo, hi) = self.clopper_pearson(MC_INTERVAL_LEVEL);
        lo <= alpha && alpha <= hi
    }

    /// Reject / retain by p against α, or undetermined when α is inside the interval.
    pub fn decision(&self, alpha: f64) -> Decision {
        if self.ambiguous(alpha) {
            Decision::Undetermined
        } else {
            Decision::from_p(self.p(), alpha)
        }
    }

    /// The `mc` block of the results.
    pub fn to_result(&self, scheme: &str) -> MonteCarlo {
        let (lo, hi) = self.clopper_pearson(MC_INTERVAL_LEVEL);
        MonteCarlo {
            resamples: self.resamples,
            exceedances: self.exceedances,
            se: self.se(),
            ci_low: lo,
            ci_high: hi,
            exact: false,
            scheme: scheme.to_string(),
            scheme_exact: None,
        }
    }
}

/// The next number of resamples when α lies inside the interval: roughly double, never
/// beyond `max` (DESIGN.md: extend up to `--max-permutations`, then `undetermined`).
pub fn next_resamples(current: u64, max: u64) -> Option<u64> {
    (current < max).then(|| (2 * current + 1).min(max))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn phipson_smyth_p_and_se() {
        let c = McCount { resamples: 999, exceedances: 9 };
        assert_eq!(c.p(), 0.01);
        let ph = 9.0 / 999.0;
        assert!((c.se() - (ph * (1.0 - ph) / 999.0_f64).sqrt()).abs() < 1e-15);
    }

    #[test]
    fn clopper_pearson_matches_scipy() {
        // Source: scipy 1.17 `binomtest(9, 999).proportion_ci(0.99, 'exact')` =
        // (0.0031432067272063, 0.01990841650134783).
        let c = McCount { resamples: 999, exceedances: 9 };
        let (lo, hi) = c.clopper_pearson(0.99);
        // scipy's own root-finding differs from its beta.ppf in the 11th digit, so 1e-9 relative.
        assert!((lo / 0.0031432067272063 - 1.0).abs() < 1e-9, "{lo}");
        assert!((hi / 0.01990841650134783 - 1.0).abs() < 1e-9, "{hi}");
        let zero = McCount { resamples: 100, exceedances: 0 };
        assert_eq!(zero.clopper_pearson(0.99).0, 0.0);
    }

    #[test]
    fn decisions_are_undetermined_near_alpha() {
        assert_eq!(McCount { resamples: 999, exceedances: 49 }.decision(0.05), Decision::Undetermined);
        assert_eq!(McCount { resamples: 999, exceedances: 1 }.decision(0.05), Decision::Reject);
        assert_eq!(McCount { resamples: 999, exceedances: 500 }.decision(0.05), Decision::Retain);
        assert_eq!(next_resamples(4999, 99_999), Some(9999));
        assert_eq!(next_resamples(99_999, 99_999), None);
    }

    #[test]
    fn exceedance_rule_guards_ties() {
        assert!(exceeds(1.0 - 1e-12, 1.0));
        assert!(!exceeds(0.999, 1.0));
        assert!(exceeds(0.0, 0.0));
    }
}
