//! Bootstrap confidence intervals from resampled statistics: the percentile and BCa
//! intervals (METHODS §8.2–§8.3), the stratified-jackknife acceleration, and the Monte
//! Carlo standard error of every interval end.
//!
//! This module knows no statistic: callers pass the B resampled values θ*_b (sorted
//! ascending), the estimate θ̂ and, for BCa, the acceleration accumulated from
//! leave-one-out values stratum by stratum ([`Acceleration`]). Conventions follow scipy's
//! `stats.bootstrap` so that the same θ* give the same interval: type-7 quantiles,
//! z₀ from the proportion of θ* below θ̂ with ties counted one half, and
//! z_{α/2} = Φ⁻¹((1 − level)/2). One deliberate difference: values within a relative
//! [`TIE_REL`] of θ̂ count as ties (see there).
//!
//! **Monte Carlo error of an end.** An interval end is a quantile of B random draws, so
//! it carries resampling noise that more resamples would shrink. Its standard error is
//! computed by a first-order expansion of the empirical cdf F̂ of the θ* (a documented
//! alternative to Efron's 1992 jackknife-after-bootstrap, which estimates the *sampling*
//! variability of a bootstrap quantity rather than its resampling noise):
//! Q̂(p) ≈ Q(p) − (F̂(Q(p)) − p)/f, so SE = √(p(1 − p)/B)/f; for BCa the level α₁ itself
//! moves with F̂(θ̂) through z₀, which adds g'² p₀(1 − p₀) − 2g'(min(p₀, α₁) − p₀α₁) to
//! α₁(1 − α₁) (g = dα₁/dp₀). The density f is estimated without smoothing from the
//! order statistics ±√(Bp(1 − p)) positions either side of the end (the binomial
//! standard deviation of the rank, as in distribution-free quantile intervals; Hall &
//! Sheather 1988, JRSS-B 50:381–391, cited from memory). The checks compare these SEs with the
//! spread of the ends over repeated seeds. An SE of 0 means the resampled values are tied
//! all around the end (a discrete bootstrap distribution, as in a cell of three): the end
//! is then the same atom for almost any B.

use crate::dist;
use crate::summary::quantile_type7;

/// Why an interval could not be computed.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum IntervalProblem {
    /// Fewer than two finite resampled values.
    TooFewResamples,
    /// Every resampled value is the same (no resampling variability).
    Degenerate,
    /// θ̂ lies at or beyond an edge of the bootstrap distribution, so z₀ = ±∞.
    BiasUndefined,
    /// The jackknife values do not vary, or one is undefined, so the acceleration is undefined.
    AccelerationUndefined,
    /// 1 − a(z₀ + z) ≤ 0: the BCa adjustment leaves its domain.
    AdjustmentOutOfRange,
}

impl IntervalProblem {
    /// The problem in words.
    pub fn describe(self) -> &'static str {
        match self {
            IntervalProblem::TooFewResamples => "fewer than two resamples gave a value",
            IntervalProblem::Degenerate => "every resample gave the same value (no resampling variability)",
            IntervalProblem::BiasUndefined => {
                "the estimate lies at an edge of its bootstrap distribution, so the bias correction z0 is infinite"
            }
            IntervalProblem::AccelerationUndefined => {
                "the leave-one-out (jackknife) values are constant or undefined, so the acceleration is undefined"
            }
            IntervalProblem::AdjustmentOutOfRange => "the BCa adjustment 1 − a(z0 + z) is not positive",
        }
    }
}

/// One end of an interval with its Monte Carlo standard error.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct End {
    /// The end (same units as the statistic).
    pub value: f64,
    /// Monte Carlo standard error of the end (resampling noise for this B).
    pub mc_se: f64,
}

/// Both ends of an interval.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Ends {
    /// Lower end.
    pub low: End,
    /// Upper end.
    pub high: End,
}

/// A BCa interval with its ingredients.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Bca {
    /// The interval ends.
    pub ends: Ends,
    /// Bias correction z₀.
    pub z0: f64,
    /// Acceleration a.
    pub acceleration: f64,
    /// Adjusted probability level of the lower end, α₁.
    pub alpha_low: f64,
    /// Adjusted probability level of the upper end, α₂.
    pub alpha_high: f64,
}

/// Probability of each tail, (1 − level)/2, computed as scipy does.
fn tail(level: f64) -> f64 {
    (1.0 - level) / 2.0
}

fn check_spread(sorted: &[f64]) -> Result<(), IntervalProblem> {
    match sorted {
        [] | [_] => Err(IntervalProblem::TooFewResamples),
        [first, .., last] if first == last => Err(IntervalProblem::Degenerate),
        _ => Ok(()),
    }
}

/// Value at fractional index `pos` ∈ [0, B − 1] of sorted data (linear interpolation).
fn at_index(sorted: &[f64], pos: f64) -> f64 {
    let lo = pos.floor() as usize;
    let frac = pos - lo as f64;
    if lo + 1 >= sorted.len() {
        sorted[sorted.len() - 1]
    } else {
        sorted[lo] + frac * (sorted[lo + 1] - sorted[lo])
    }
}

/// Slope of the type-7 quantile function per unit of rank at probability `p`, estimated
/// from the order statistics √(Bp(1 − p)) ranks either side (at least one rank).
fn slope_per_rank(sorted: &[f64], p: f64) -> f64 {
    let b = sorted.len() as f64;
    let h = (b - 1.0) * p;
    let m = (b * p * (1.0 - p)).sqrt().max(1.0);
    let lo = (h - m).max(0.0);
    let hi = (h + m).min(b - 1.0);
    if hi <= lo {
        return 0.0;
    }
    (at_index(sorted, hi) - at_index(sorted, lo)) / (hi - lo)
}

/// Monte Carlo SE of the type-7 quantile at `p` of B sorted draws: slope·√(B·p(1 − p)).
pub fn quantile_mc_se(sorted: &[f64], p: f64) -> f64 {
    let b = sorted.len() as f64;
    slope_per_rank(sorted, p) * (b * p * (1.0 - p)).sqrt()
}

/// Percentile interval (METHODS §8.2): [Q(α/2), Q(1 − α/2)] of the sorted resampled
/// values with type-7 quantiles (Hyndman & Fan 1996), α = 1 − `level`; each end with its
/// Monte Carlo SE (module doc). Same as scipy `stats.bootstrap(method='percentile')`.
///
/// # Errors
/// [`IntervalProblem::TooFewResamples`] or [`IntervalProblem::Degenerate`].
pub fn percentile(sorted: &[f64], level: f64) -> Result<Ends, IntervalProblem> {
    check_spread(sorted)?;
    let a = tail(level);
    let end = |p: f64| End { value: quantile_type7(sorted, p), mc_se: quantile_mc_se(sorted, p) };
    Ok(Ends { low: end(a), high: end(1.0 - a) })
}

/// Resampled values within TIE_REL·(|θ̂| + range of θ*) of θ̂ count as ties in z₀. With
/// rounded data (one decimal, say) many resamples tie θ̂ in exact arithmetic, and
/// without a tolerance the order of floating-point summation alone would decide on which
/// side they fall (scipy counts exact floating equality only; for data without such
/// ties the two agree).
pub const TIE_REL: f64 = 1e-10;

/// z₀ = Φ⁻¹(p₀), p₀ = (#{θ* < θ̂} + #{θ* ≤ θ̂})/(2B) (ties count one half; METHODS §8.3;
/// ties within [`TIE_REL`]). Returns (z₀, p₀); z₀ is infinite when p₀ is 0 or 1.
pub fn bias_correction(sorted: &[f64], estimate: f64) -> (f64, f64) {
    let (Some(first), Some(last)) = (sorted.first(), sorted.last()) else {
        return (f64::NAN, f64::NAN);
    };
    let tol = TIE_REL * (estimate.abs() + (last - first).abs());
    let below = sorted.partition_point(|&x| x < estimate - tol);
    let at_or_below = sorted.partition_point(|&x| x <= estimate + tol);
    let p0 = (below + at_or_below) as f64 / (2.0 * sorted.len() as f64);
    (dist::normal_quantile(p0), p0)
}

/// BCa interval (Efron 1987, JASA 82:171–185; METHODS §8.3) from the sorted resampled
/// values, the estimate θ̂ and the acceleration `a` ([`Acceleration`]):
/// z₀ as in [`bias_correction`], α₁ = Φ(z₀ + (z₀ + z_{α/2})/(1 − a(z₀ + z_{α/2}))),
/// α₂ likewise with z_{1−α/2} = −z_{α/2}, interval [Q(α₁), Q(α₂)] (type 7). Same
/// arithmetic as scipy `stats.bootstrap(method='BCa')`. Each end carries its Monte Carlo
/// SE including the resampling noise of z₀ (module doc).
///
/// # Errors
/// [`IntervalProblem`]: too few or degenerate resamples, z₀ infinite, acceleration not
/// finite, or 1 − a(z₀ + z) ≤ 0.
pub fn bca(sorted: &[f64], estimate: f64, acceleration: f64, level: f64) -> Result<Bca, IntervalProblem> {
    check_spread(sorted)?;
    if !acceleration.is_finite() {
        return Err(IntervalProblem::AccelerationUndefined);
    }
    let (z0, p0) = bias_correction(sorted, estimate);
    if !z0.is_finite() {
        return Err(IntervalProblem::BiasUndefined);
    }
    let z_low = dist::normal_quantile(tail(level));
    let b = sorted.len() as f64;
    let end = |z: f64| -> Result<(End, f64), IntervalProblem> {
        let w = z0 + z;
        let denom = 1.0 - acceleration * w;
        if denom.is_nan() || denom <= 0.0 {
            return Err(IntervalProblem::AdjustmentOutOfRange);
        }
        let arg = z0 + w / denom;
        let alpha = dist::normal_cdf(arg);
        // dα/dp₀ = φ(arg)·(1 + 1/denom²)/φ(z₀).
        let g = dist::normal_pdf(arg) * (1.0 + 1.0 / (denom * denom)) / dist::normal_pdf(z0);
        let var = alpha * (1.0 - alpha) + g * g * p0 * (1.0 - p0) - 2.0 * g * (p0.min(alpha) - p0 * alpha);
        let mc_se = slope_per_rank(sorted, alpha) * (b * var.max(0.0)).sqrt();
        Ok((End { value: quantile_type7(sorted, alpha), mc_se }, alpha))
    };
    let (low, alpha_low) = end(z_low)?;
    let (high, alpha_high) = end(-z_low)?;
    Ok(Bca { ends: Ends { low, high }, z0, acceleration, alpha_low, alpha_high })
}

/// The stratified-jackknife acceleration (METHODS §8.3; Efron & Tibshirani 1993,
/// eq. 15.36; scipy's multi-sample `bootstrap`): for stratum c with leave-one-out values
/// θ̂_(c,i), i = 1..n_c, U_ci = (n_c − 1)(θ̄_c − θ̂_(c,i)) and
/// a = (1/6)·Σ_c Σ_i U_ci³/n_c³ / (Σ_c Σ_i U_ci²/n_c²)^{3/2}.
/// A stratum whose deletions leave the statistic unchanged contributes nothing.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct Acceleration {
    num: f64,
    den: f64,
    undefined: bool,
}

impl Acceleration {
    /// An empty accumulator.
    pub fn new() -> Acceleration {
        Acceleration::default()
    }

    /// Adds one stratum from its leave-one-out values (two passes; non-finite values
    /// make the acceleration undefined).
    pub fn add_stratum(&mut self, loo: &[f64]) {
        let n = loo.len();
        if n == 0 {
            return;
        }
        let mean = loo.iter().sum::<f64>() / n as f64;
        let (mut m2, mut m3) = (0.0, 0.0);
        for x in loo {
            let d = x - mean;
            m2 += d * d;
            m3 += d * d * d;
        }
        self.add_central_sums(n, m2, m3);
    }

    /// Adds one stratum of n values from their central sums Σ(θ_i − θ̄)² and Σ(θ_i − θ̄)³.
    pub fn add_central_sums(&mut self, n: usize, m2: f64, m3: f64) {
        if !(m2.is_finite() && m3.is_finite()) {
            self.undefined = true;
            return;
        }
        let nf = n as f64;
        let k = nf - 1.0;
        // ΣU² = (n − 1)²·m2, ΣU³ = −(n − 1)³·m3 (U = (n − 1)(θ̄ − θ_i)).
        self.num += -(k * k * k) * m3 / (nf * nf * nf);
        self.den += k * k * m2 / (nf * nf);
    }

    /// Marks the acceleration undefined (a leave-one-out value does not exist).
    pub fn mark_undefined(&mut self) {
        self.undefined = true;
    }

    /// a, or NaN when undefined (a non-finite leave-one-out value, or no variation).
    pub fn value(&self) -> f64 {
        if self.undefined || self.den.is_nan() || self.den <= 0.0 {
            return f64::NAN;
        }
        self.num / (6.0 * self.den.powf(1.5))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn sorted(mut v: Vec<f64>) -> Vec<f64> {
        v.sort_unstable_by(f64::total_cmp);
        v
    }

    #[test]
    fn percentile_uses_type_7_quantiles() {
        // numpy.percentile([1..10], [2.5, 97.5]) = 1.225, 9.775 (linear method).
        let x: Vec<f64> = (1..=10).map(f64::from).collect();
        let e = percentile(&x, 0.95).unwrap();
        assert!((e.low.value - 1.225).abs() < 1e-12 && (e.high.value - 9.775).abs() < 1e-12);
    }

    #[test]
    fn degenerate_and_tiny_inputs_are_problems() {
        assert_eq!(percentile(&[1.0, 1.0, 1.0], 0.95), Err(IntervalProblem::Degenerate));
        assert_eq!(percentile(&[1.0], 0.95), Err(IntervalProblem::TooFewResamples));
        assert_eq!(bca(&[1.0, 2.0, 3.0], 5.0, 0.0, 0.95).unwrap_err(), IntervalProblem::BiasUndefined);
        assert_eq!(bca(&[1.0, 2.0, 3.0], 2.0, f64::NAN, 0.95).unwrap_err(), IntervalProblem::AccelerationUndefined);
        assert_eq!(bca(&[1.0, 2.0, 3.0], 2.0, 5.0, 0.95).unwrap_err(), IntervalProblem::AdjustmentOutOfRange);
    }

    #[test]
    fn ties_within_rounding_count_one_half() {
        // 0.1 + 0.2 ≠ 0.3 in floating point; the tie still counts one half.
        let x = [0.1, 0.1 + 0.2, 0.5];
        let (_, p0) = bias_correction(&x, 0.3);
        assert_eq!(p0, (1.0 + 2.0) / 6.0);
    }

    #[test]
    fn bca_without_bias_or_acceleration_is_the_percentile_interval() {
        // Property: z0 = 0 (θ̂ at the median, ties half) and a = 0 give α₁ = α/2.
        let x: Vec<f64> = (0..1001).map(|i| (i as f64 / 100.0).sin() * 3.0 + i as f64 * 0.01).collect();
        let x = sorted(x);
        let med = x[500];
        let b = bca(&x, med, 0.0, 0.9).unwrap();
        let p = percentile(&x, 0.9).unwrap();
        assert!(b.z0.abs() < 1e-12);
        assert!((b.ends.low.value - p.low.value).abs() < 1e-9);
        assert!((b.ends.high.value - p.high.value).abs() < 1e-9);
    }

    #[test]
    fn acceleration_of_a_mean_is_the_skewness_formula() {
        // Property (Efron & Tibshirani 1993, eq. 14.15): for the mean of one sample,
        // a = Σ(x − x̄)³ / (6 (Σ(x − x̄)²)^{3/2}).
        let x = [1.0, 2.0, 2.5, 4.0, 9.0, 3.0];
        let n = x.len() as f64;
        let s: f64 = x.iter().sum();
        let loo: Vec<f64> = x.iter().map(|v| (s - v) / (n - 1.0)).collect();
        let mut acc = Acceleration::new();
        acc.add_stratum(&loo);
        let m = s / n;
        let m2: f64 = x.iter().map(|v| (v - m).powi(2)).sum();
        let m3: f64 = x.iter().map(|v| (v - m).powi(3)).sum();
        let want = m3 / (6.0 * m2.powf(1.5));
        assert!((acc.value() - want).abs() < 1e-14, "{} vs {want}", acc.value());
    }

    #[test]
    fn quantile_mc_se_of_uniform_draws_is_the_binomial_formula() {
        // Property: for B equally spaced values on [0, 1] the slope is 1/(B − 1) per
        // rank, so SE = √(p(1 − p)·B)/(B − 1) ≈ √(p(1 − p)/B).
        let b = 10_001;
        let x: Vec<f64> = (0..b).map(|i| i as f64 / (b - 1) as f64).collect();
        let se = quantile_mc_se(&x, 0.025);
        let want = (0.025f64 * 0.975 / b as f64).sqrt();
        assert!((se / want - 1.0).abs() < 1e-3, "{se} vs {want}");
    }
}
