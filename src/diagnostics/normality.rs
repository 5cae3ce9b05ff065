//! Normality checks: the Shapiro–Wilk test (Royston's approximation) and the shape of
//! the pooled full-model residuals.
//!
//! Shapiro–Wilk is written out from METHODS §2.3 (Shapiro & Wilk 1965; Royston 1992,
//! 1995 "AS R94") rather than taken from a library, because quorum needs it per cell
//! and on the residuals, with typed reasons when it cannot run (n < 3, constant data)
//! instead of errors. W is computed as one minus a squared-correlation defect, as AS R94
//! does, so that ln(1 − W) keeps its digits when W is close to 1.

use crate::dist;
use crate::summary;

/// Smallest sample the Shapiro–Wilk approximation covers.
pub const SW_MIN_N: usize = 3;
/// Largest sample Royston's p-value approximation was validated for (AS R94).
pub const SW_MAX_VALIDATED_N: usize = 5000;

/// A Shapiro–Wilk result.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SwTest {
    /// W statistic in (0, 1].
    pub w: f64,
    /// Upper-tail p-value (Royston 1995).
    pub p: f64,
    /// n exceeded [`SW_MAX_VALIDATED_N`]: computed, but the p-value is not validated.
    pub beyond_validated_n: bool,
}

/// Why Shapiro–Wilk cannot be computed.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SwProblem {
    /// Fewer than three values.
    TooFew,
    /// Every value is the same (range 0).
    Constant,
}

impl SwProblem {
    /// The reason in plain words.
    pub fn reason(self) -> &'static str {
        match self {
            SwProblem::TooFew => "fewer than 3 values",
            SwProblem::Constant => "all values equal",
        }
    }
}

/// poly(c; t) = c0 + c1·t + c2·t² + … (Horner).
fn poly(c: &[f64], t: f64) -> f64 {
    c.iter().rev().fold(0.0, |acc, &ci| acc * t + ci)
}

const C1: [f64; 6] = [0.0, 0.221157, -0.147981, -2.071190, 4.434685, -2.706056];
const C2: [f64; 6] = [0.0, 0.042981, -0.293762, -1.752461, 5.682633, -3.582633];
const SMALL_GAMMA: [f64; 2] = [-2.273, 0.459];
const SMALL_MU: [f64; 4] = [0.5440, -0.39978, 0.025054, -0.0006714];
const SMALL_SIGMA: [f64; 4] = [1.3822, -0.77857, 0.062767, -0.0020322];
const LARGE_MU: [f64; 4] = [-1.5861, -0.31082, -0.083751, 0.0038915];
const LARGE_SIGMA: [f64; 3] = [-0.4803, -0.082676, 0.0030302];
/// p-value returned when ln(1 − W) is at or beyond γ for 4 ≤ n ≤ 11 (METHODS §2.3: a
/// tiny constant; practically unreachable, since W that small cannot occur at these n).
const SMALL_N_FLOOR_P: f64 = 1e-99;

/// [`coefficients`], remembered for a few recent n between 4096 and 262 144 values (cells
/// of a large design often share their size, and each costs n/2 normal quantiles).
fn shared_coefficients(n: usize) -> std::sync::Arc<Vec<f64>> {
    use std::sync::{Arc, Mutex};
    static RECENT: Mutex<Vec<(usize, Arc<Vec<f64>>)>> = Mutex::new(Vec::new());
    if !(4096..=262_144).contains(&n) {
        return Arc::new(coefficients(n));
    }
    let found = RECENT.lock().ok().and_then(|r| r.iter().find(|e| e.0 == n).map(|e| Arc::clone(&e.1)));
    if let Some(a) = found {
        return a;
    }
    let a = Arc::new(coefficients(n));
    if let Ok(mut recent) = RECENT.lock() {
        if recent.len() >= 8 {
            recent.remove(0);
        }
        recent.push((n, Arc::clone(&a)));
    }
    a
}

/// The upper half of the antisymmetric coefficients: `a[j]` is the coefficient of the
/// (n − j)-th order statistic (j = 0 the largest), a_(j+1) = −a[j] for the mirror.
fn coefficients(n: usize) -> Vec<f64> {
    let half = n / 2;
    if n == 3 {
        return vec![std::f64::consts::FRAC_1_SQRT_2];
    }
    let nf = n as f64;
    // m_i for the upper half: m_(n−j) = −Φ⁻¹((j + 1 − 3/8)/(n + 1/4)), j = 0..half.
    // The smallest plotting position is 2.5/(4n + 1), above 1e−12 for any n below
    // 10¹¹, where PPND16 alone is within 2e−15 of the refined quantile (tested in
    // `dist::normal`) and much faster for a large n.
    let m_j = |j: usize| -dist::normal_quantile_ppnd16((j as f64 + 1.0 - 0.375) / (nf + 0.25));
    // Each m_j on its own, so splitting the work across threads changes no digit.
    let m: Vec<f64> = if half >= 16_384 {
        use rayon::prelude::*;
        (0..half).into_par_iter().map(m_j).collect()
    } else {
        (0..half).map(m_j).collect()
    };
    let big_m = 2.0 * m.iter().map(|v| v * v).sum::<f64>();
    let u = 1.0 / nf.sqrt();
    let mut a = vec![0.0; half];
    let an = m[0] / big_m.sqrt() + poly(&C1, u);
    a[0] = an;
    let (first, phi) = if n >= 6 {
        let an1 = m[1] / big_m.sqrt() + poly(&C2, u);
        a[1] = an1;
        (2, (big_m - 2.0 * m[0] * m[0] - 2.0 * m[1] * m[1]) / (1.0 - 2.0 * an * an - 2.0 * an1 * an1))
    } else {
        (1, (big_m - 2.0 * m[0] * m[0]) / (1.0 - 2.0 * an * an))
    };
    let root = phi.sqrt();
    for j in first..half {
        a[j] = m[j] / root;
    }
    a
}

/// The Shapiro–Wilk test of normality (Shapiro & Wilk 1965) with Royston's coefficient
/// approximation (1992) and p-value (1995, AS R94), METHODS §2.3.
///
/// Coefficients: m_i = Φ⁻¹((i − 3/8)/(n + 1/4)); the two extreme coefficients from
/// Royston's polynomials in 1/√n, the others m_i/√φ. W = (Σ a_i x_(i))²/Σ(x_i − x̄)²,
/// computed as 1 − (1 − r²) with r the correlation of a and x (AS R94). p: exact for
/// n = 3 ((6/π)(asin √W − asin √¾)); for 4 ≤ n ≤ 11 a normal approximation of
/// −ln(γ − ln(1 − W)); for n ≥ 12 of ln(1 − W); both upper tail. Φ⁻¹ is Wichura's
/// PPND16 ([`dist::normal_quantile_ppnd16`]); scipy's port uses a 7-digit
/// approximation, so the two agree to about 1e-9 in W and 1e-6 in p.
///
/// # Errors
/// [`SwProblem::TooFew`] for n < 3, [`SwProblem::Constant`] when every value is equal.
/// Above n = 5000 the test is computed and `beyond_validated_n` is set.
pub fn shapiro_wilk(x: &[f64]) -> Result<SwTest, SwProblem> {
    if x.len() < SW_MIN_N {
        return Err(SwProblem::TooFew);
    }
    shapiro_wilk_sorted(&summary::sorted(x))
}

/// Why Shapiro–Wilk cannot run on these values, sorted ascending (`None` when it can):
/// the checks of [`shapiro_wilk`] without the test, in O(1).
pub fn sw_problem_sorted(sorted: &[f64]) -> Option<SwProblem> {
    Standardize::of(sorted).err()
}

/// [`shapiro_wilk`] of values already sorted ascending.
///
/// # Errors
/// As [`shapiro_wilk`].
pub fn shapiro_wilk_sorted(sorted: &[f64]) -> Result<SwTest, SwProblem> {
    let how = Standardize::of(sorted)?;
    let mut s = sorted.to_vec();
    how.apply(&mut s);
    sw_standardized(&s)
}

/// [`shapiro_wilk_sorted`] of values sorted ascending that the caller no longer needs:
/// they are standardized in place instead of in a copy (the same numbers).
///
/// # Errors
/// As [`shapiro_wilk`].
pub fn shapiro_wilk_sorted_owned(mut sorted: Vec<f64>) -> Result<SwTest, SwProblem> {
    let how = Standardize::of(&sorted)?;
    how.apply(&mut sorted);
    sw_standardized(&sorted)
}

/// W and its p-value from the sorted values standardized as [`Standardize`] says.
fn sw_standardized(s: &[f64]) -> Result<SwTest, SwProblem> {
    let n = s.len();
    let a_half = shared_coefficients(n);
    // Full antisymmetric coefficient vector in ascending order of x.
    let coef = |i: usize| -> f64 {
        let j = n - 1 - i; // position from the top
        if j < a_half.len() {
            a_half[j]
        } else if i < a_half.len() {
            -a_half[i]
        } else {
            0.0 // middle value of odd n
        }
    };
    let a_mean = (0..n).map(coef).sum::<f64>() / n as f64;
    let x_mean = s.iter().sum::<f64>() / n as f64;
    let (mut ssa, mut ssx, mut sax) = (0.0, 0.0, 0.0);
    for (i, &xi) in s.iter().enumerate() {
        let da = coef(i) - a_mean;
        let dx = xi - x_mean;
        ssa += da * da;
        ssx += dx * dx;
        sax += da * dx;
    }
    let root = (ssa * ssx).sqrt();
    let one_minus_w = ((root - sax) * (root + sax) / (ssa * ssx)).max(0.0);
    let w = (1.0 - one_minus_w).min(1.0);
    let p = if n == 3 {
        let p = 6.0 / std::f64::consts::PI * (w.sqrt().asin() - 0.75f64.sqrt().asin());
        p.clamp(0.0, 1.0)
    } else {
        let w1 = one_minus_w.ln();
        let nf = n as f64;
        if n <= 11 {
            let gamma = poly(&SMALL_GAMMA, nf);
            if w1 >= gamma {
                SMALL_N_FLOOR_P
            } else {
                let y = -(gamma - w1).ln();
                let mu = poly(&SMALL_MU, nf);
                let sigma = poly(&SMALL_SIGMA, nf).exp();
                dist::normal_sf((y - mu) / sigma)
            }
        } else {
            let l = nf.ln();
            let mu = poly(&LARGE_MU, l);
            let sigma = poly(&LARGE_SIGMA, l).exp();
            dist::normal_sf((w1 - mu) / sigma)
        }
    };
    Ok(SwTest { w, p: if p.is_nan() { 1.0 } else { p }, beyond_validated_n: n > SW_MAX_VALIDATED_N })
}

/// How AS R94 standardizes the sorted values before computing W: divide by the largest
/// magnitude (so that extreme values cannot overflow), subtract the median of the
/// result, divide by the range. [`Standardize::of`] finds the three numbers from the
/// ends and the middle; [`Standardize::apply`] makes the three passes.
#[derive(Debug, Clone, Copy)]
struct Standardize {
    big: Option<f64>,
    median: f64,
    range: f64,
}

impl Standardize {
    /// The scaling of `sorted`, or why Shapiro–Wilk cannot run on it: O(1), as only the
    /// ends and the middle of the sorted values matter.
    fn of(sorted: &[f64]) -> Result<Standardize, SwProblem> {
        let n = sorted.len();
        if n < SW_MIN_N {
            return Err(SwProblem::TooFew);
        }
        let big = sorted[0].abs().max(sorted[n - 1].abs());
        let big = (big > 0.0 && big.is_finite()).then_some(big);
        let scaled = |v: f64| big.map_or(v, |b| v / b);
        let median =
            if n % 2 == 1 { scaled(sorted[n / 2]) } else { 0.5 * (scaled(sorted[n / 2 - 1]) + scaled(sorted[n / 2])) };
        let range = (scaled(sorted[n - 1]) - median) - (scaled(sorted[0]) - median);
        if range.is_nan() || range <= 0.0 || !range.is_finite() {
            return Err(SwProblem::Constant);
        }
        Ok(Standardize { big, median, range })
    }

    /// Standardizes the sorted values in place (simple passes, which the compiler
    /// vectorizes).
    fn apply(self, s: &mut [f64]) {
        if let Some(big) = self.big {
            for v in s.iter_mut() {
                *v /= big;
            }
        }
        for v in s.iter_mut() {
            *v -= self.median;
        }
        for v in s.iter_mut() {
            *v /= self.range;
        }
    }
}

/// Shape of a sample: bias-adjusted skewness and excess kurtosis with their standard
/// errors under normality (Joanes & Gill 1998, METHODS §2.1), and Shapiro–Wilk.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Shape {
    /// Values.
    pub n: usize,
    /// G1; `None` for n < 3 or constant data.
    pub skewness: Option<f64>,
    /// SE of G1; `None` for n < 3.
    pub skewness_se: Option<f64>,
    /// G2; `None` for n < 4 or constant data.
    pub excess_kurtosis: Option<f64>,
    /// SE of G2; `None` for n < 4.
    pub excess_kurtosis_se: Option<f64>,
    /// Shapiro–Wilk, or why it cannot run.
    pub shapiro_wilk: Result<SwTest, SwProblem>,
}

/// The [`Shape`] of `x`.
pub fn shape(x: &[f64]) -> Shape {
    shape_given_sorted(x, &summary::sorted(x))
}

/// The [`Shape`] of `x` given the same values sorted ascending (moments from `x` in
/// its own order, Shapiro–Wilk from `sorted`).
pub fn shape_given_sorted(x: &[f64], sorted: &[f64]) -> Shape {
    Shape::new(x.len(), summary::skewness_and_kurtosis(x), shapiro_wilk_sorted(sorted))
}

impl Shape {
    /// The shape of n values from their (G1, G2) and Shapiro–Wilk result (non-finite
    /// moments become `None`).
    pub fn new(n: usize, (g1, g2): (Option<f64>, Option<f64>), shapiro_wilk: Result<SwTest, SwProblem>) -> Shape {
        Shape {
            n,
            skewness: g1.filter(|v| v.is_finite()),
            skewness_se: summary::skewness_se(n),
            excess_kurtosis: g2.filter(|v| v.is_finite()),
            excess_kurtosis_se: summary::excess_kurtosis_se(n),
            shapiro_wilk,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn methods_12_1_cells() {
        // METHODS §12.1 (scipy `stats.shapiro`, computed with scipy 1.17.1): cell a1b1 and a2b1.
        let t = shapiro_wilk(&[9.6, 10.2, 9.9, 10.0, 9.2]).unwrap();
        assert!((t.w - 0.9529604619).abs() < 1e-8, "{t:?}");
        assert!((t.p - 0.7583121102).abs() < 2e-6, "{t:?}");
        let t = shapiro_wilk(&[13.8, 9.6, 9.4, 9.9, 9.2, 10.1, 9.8, 9.9]).unwrap();
        assert!((t.w - 0.6127993850).abs() < 1e-8, "{t:?}");
        assert!((t.p - 0.0002243155).abs() < 2e-6, "{t:?}");
    }

    #[test]
    fn n_3_has_the_exact_p() {
        // Equally spaced triple: W = 1 (a perfect fit), p = 1 by the exact n = 3 formula.
        let t = shapiro_wilk(&[1.0, 2.0, 3.0]).unwrap();
        assert!((t.w - 1.0).abs() < 1e-12);
        // asin(√W) has a square-root singularity at W = 1: a rounding error of 1e-16 in W
        // moves p by about 1e-8, so p is checked to 1e-6.
        assert!((t.p - 1.0).abs() < 1e-6, "{t:?}");
        // Two equal and one apart: W = 0.75, the smallest possible, p = 0.
        let t = shapiro_wilk(&[1.0, 1.0, 2.0]).unwrap();
        assert!((t.w - 0.75).abs() < 1e-12);
        assert!(t.p < 1e-12, "{t:?}");
    }

    #[test]
    fn extreme_magnitudes_do_not_overflow() {
        // W is scale-invariant: the METHODS §12.1 cell a1b1 scaled to ±1e307.
        let x = [9.6, 10.2, 9.9, 10.0, 9.2];
        let t = shapiro_wilk(&x).unwrap();
        let big: Vec<f64> = x.iter().map(|v| (v - 9.8) * 1e307).collect();
        let u = shapiro_wilk(&big).unwrap();
        assert!((t.w - u.w).abs() < 1e-12 && (t.p - u.p).abs() < 1e-10, "{t:?} {u:?}");
    }

    #[test]
    fn degenerate_samples_are_typed() {
        assert_eq!(shapiro_wilk(&[1.0, 2.0]), Err(SwProblem::TooFew));
        assert_eq!(shapiro_wilk(&[]), Err(SwProblem::TooFew));
        assert_eq!(shapiro_wilk(&[4.0, 4.0, 4.0, 4.0]), Err(SwProblem::Constant));
    }

    #[test]
    fn coefficients_are_unit_length() {
        for n in [4usize, 5, 6, 7, 11, 12, 50, 5001] {
            let a = coefficients(n);
            let ss = 2.0 * a.iter().map(|v| v * v).sum::<f64>();
            assert!((ss - 1.0).abs() < 1e-12, "n = {n}: Σa² = {ss}");
        }
    }
}
