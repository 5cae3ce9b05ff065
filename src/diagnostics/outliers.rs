//! Outlier rules per cell: Tukey's fences (1.5 × IQR "outside", 3 × IQR "far out")
//! on type-7 quartiles, and the MAD–median rule (METHODS §2.4).
//!
//! Everything works on one cell's values at a time and returns positions within the
//! cell, so the caller maps them to input lines (`Design::lines`). The same screening
//! code runs on observed cells and on the simulated normal cells that calibrate the
//! flags ([`super::calibration`]), which is why [`screen_unsorted`] works in place with
//! order-statistic selection (O(n) per cell, no sort) and a scratch buffer, and
//! allocates nothing.
//!
//! The raw rules flag most clean datasets in small cells (a 2 × 2 design with 5 normal
//! values per cell has a far-out point 44% of the time with type-7 quartiles), so no
//! decision rests on a single flagged point: the flags compare counts with their
//! distribution under normality (see [`super::flags`]).

use crate::dist;
use crate::summary;

/// Tukey's inner-fence multiplier (Tukey 1977).
pub const TUKEY_OUTSIDE: f64 = 1.5;
/// Tukey's outer-fence multiplier ("far out", Tukey 1977).
pub const TUKEY_FAR: f64 = 3.0;
/// Wilcox's (2017) cut-off for the MAD–median rule, √χ²₁,₀.₉₇₅ rounded to 2.24.
pub const MAD_MEDIAN_K: f64 = 2.24;
/// Φ⁻¹(0.75): MAD/Φ⁻¹(0.75) estimates σ under normality (scipy
/// `median_abs_deviation(scale='normal')` uses this constant).
pub const MAD_NORMAL_SCALE: f64 = 0.674_489_750_196_081_7;
/// The quantile definition of the fences, printed with the results.
pub const QUANTILE_DEFINITION: &str =
    "type 7 of Hyndman & Fan 1996, numpy's method='linear': h = (n−1)p + 1, linear interpolation";

/// An outlier rule.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum Rule {
    /// Beyond Q1 − 1.5·IQR or Q3 + 1.5·IQR.
    TukeyOutside,
    /// Beyond Q1 − 3·IQR or Q3 + 3·IQR.
    TukeyFar,
    /// |x − median|/MADN > 2.24.
    MadMedian,
}

impl Rule {
    /// The rule id used in `diagnostics.outliers[].rule`.
    pub fn id(self) -> &'static str {
        match self {
            Rule::TukeyOutside => "tukey-1.5",
            Rule::TukeyFar => "tukey-3",
            Rule::MadMedian => "mad-median",
        }
    }

    /// The rule in words.
    pub fn describe(self) -> &'static str {
        match self {
            Rule::TukeyOutside => "beyond 1.5 × IQR from the type-7 quartiles of the cell (Tukey's outside points)",
            Rule::TukeyFar => "beyond 3 × IQR from the type-7 quartiles of the cell (Tukey's far-out points)",
            Rule::MadMedian => "more than 2.24 MADN from the median (MAD–median rule)",
        }
    }
}

/// Robust location and spread of one cell and the points each rule flags.
#[derive(Debug, Clone, PartialEq)]
pub struct CellScreen {
    /// First quartile (type 7).
    pub q1: f64,
    /// Third quartile (type 7).
    pub q3: f64,
    /// Median.
    pub median: f64,
    /// MAD/Φ⁻¹(0.75); 0 when more than half the values are equal.
    pub madn: f64,
    /// Positions (within the cell, input order) beyond the 1.5 × IQR fences.
    pub outside: Vec<usize>,
    /// Positions beyond the 3 × IQR fences.
    pub far: Vec<usize>,
    /// Positions flagged by the MAD–median rule; `None` when MADN = 0 (rule not applicable).
    pub mad: Option<Vec<usize>>,
}

impl CellScreen {
    /// The screening counts of the cell (as [`screen_sorted`] gives them), from this
    /// screen and the cell's values sorted ascending.
    pub fn counts(&self, sorted: &[f64]) -> ScreenCounts {
        let max_mad_score = match (sorted.first(), sorted.last()) {
            (Some(&lo), Some(&hi)) if self.madn > 0.0 => {
                (self.median - lo.min(self.median)).max(hi.max(self.median) - self.median) / self.madn
            }
            _ => f64::NAN,
        };
        ScreenCounts {
            outside: self.outside.len() as u32,
            far: self.far.len() as u32,
            mad: self.mad.as_ref().map_or(0, |m| m.len() as u32),
            madn: self.madn,
            max_mad_score,
        }
    }

    /// IQR = Q3 − Q1.
    pub fn iqr(&self) -> f64 {
        self.q3 - self.q1
    }

    /// Lower and upper fence at multiplier `k`.
    pub fn fences(&self, k: f64) -> (f64, f64) {
        (self.q1 - k * self.iqr(), self.q3 + k * self.iqr())
    }

    /// Positions flagged by `rule` (empty for the MAD rule when MADN = 0).
    pub fn flagged(&self, rule: Rule) -> &[usize] {
        match rule {
            Rule::TukeyOutside => &self.outside,
            Rule::TukeyFar => &self.far,
            Rule::MadMedian => self.mad.as_deref().unwrap_or(&[]),
        }
    }
}

/// Counts and extremes of one cell, for the calibration simulation.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ScreenCounts {
    /// Points beyond the 1.5 × IQR fences.
    pub outside: u32,
    /// Points beyond the 3 × IQR fences.
    pub far: u32,
    /// Points flagged by the MAD–median rule (0 when MADN = 0).
    pub mad: u32,
    /// MADN of the cell.
    pub madn: f64,
    /// Largest |x − median|/MADN (NaN when MADN = 0).
    pub max_mad_score: f64,
}

/// Quartiles, median and MADN of sorted data, in O(log n) beyond the quartiles.
/// MADN = median|x − M| / Φ⁻¹(0.75) (METHODS §2.4).
pub fn robust_summary(sorted: &[f64]) -> (f64, f64, f64, f64) {
    let q1 = summary::quantile_type7(sorted, 0.25);
    let q3 = summary::quantile_type7(sorted, 0.75);
    let m = summary::median_sorted(sorted);
    let n = sorted.len();
    let mad = match n {
        0 => f64::NAN,
        _ if n % 2 == 1 => kth_abs_deviation(sorted, m, n / 2),
        _ => 0.5 * (kth_abs_deviation(sorted, m, n / 2 - 1) + kth_abs_deviation(sorted, m, n / 2)),
    };
    (q1, q3, m, mad / MAD_NORMAL_SCALE)
}

/// The k-th smallest (0-based) of |x − m| over `sorted` (ascending, finite), without
/// forming the deviations: the values below m read from m outwards and those at or
/// above m are two ascending sequences, and the k-th smallest of two sorted sequences
/// is found by bisecting how many of the k + 1 smallest come from the first. O(log n).
fn kth_abs_deviation(sorted: &[f64], m: f64, k: usize) -> f64 {
    let p = sorted.partition_point(|&x| x < m);
    let (na, nb) = (p, sorted.len() - p);
    let a = |i: usize| (sorted[p - 1 - i] - m).abs();
    let b = |j: usize| (sorted[p + j] - m).abs();
    let (mut lo, mut hi) = ((k + 1).saturating_sub(nb), (k + 1).min(na));
    while lo < hi {
        let i = (lo + hi) / 2;
        if a(i) < b(k - i) {
            lo = i + 1;
        } else {
            hi = i;
        }
    }
    let (i, j) = (lo, k + 1 - lo);
    match (i > 0, j > 0) {
        (true, true) => a(i - 1).max(b(j - 1)),
        (true, false) => a(i - 1),
        _ => b(j - 1),
    }
}

/// The k-th and (k+1)-th smallest values (0-based) of `v`, reordering `v`; the second
/// is the k-th again when k is the last index. O(n) by selection.
fn order_pair(v: &mut [f64], k: usize) -> (f64, f64) {
    let (_, kth, above) = v.select_nth_unstable_by(k, f64::total_cmp);
    let a = *kth;
    let b = above.iter().copied().fold(f64::INFINITY, f64::min);
    (a, if above.is_empty() { a } else { b })
}

/// Type-7 quantile by selection (same arithmetic as [`summary::quantile_type7`]).
fn quantile_select(v: &mut [f64], p: f64) -> f64 {
    let n = v.len();
    if n == 0 {
        return f64::NAN;
    }
    let h = (n - 1) as f64 * p;
    let lo = h.floor() as usize;
    let frac = h - lo as f64;
    let (a, b) = order_pair(v, lo);
    if lo + 1 >= n {
        a
    } else {
        a + frac * (b - a)
    }
}

/// Median by selection (mean of the two middle values for even n).
fn median_select(v: &mut [f64]) -> f64 {
    let n = v.len();
    if n == 0 {
        return f64::NAN;
    }
    if n % 2 == 1 {
        order_pair(v, n / 2).0
    } else {
        let (a, b) = order_pair(v, n / 2 - 1);
        0.5 * (a + b)
    }
}

/// Screening counts of one cell from its values in any order; `work` is reordered and
/// `scratch` overwritten. Gives exactly the counts of [`screen`] (the same order
/// statistics, found by selection instead of sorting).
pub fn screen_unsorted(work: &mut [f64], scratch: &mut Vec<f64>) -> ScreenCounts {
    let q1 = quantile_select(work, 0.25);
    let q3 = quantile_select(work, 0.75);
    let m = median_select(work);
    scratch.clear();
    scratch.extend(work.iter().map(|x| (x - m).abs()));
    let madn = median_select(scratch) / MAD_NORMAL_SCALE;
    counts_from(work, q1, q3, m, madn)
}

/// Screening counts of one cell given sorted values (allocates nothing).
pub fn screen_sorted(sorted: &[f64]) -> ScreenCounts {
    let (q1, q3, m, madn) = robust_summary(sorted);
    counts_from(sorted, q1, q3, m, madn)
}

fn counts_from(values: &[f64], q1: f64, q3: f64, m: f64, madn: f64) -> ScreenCounts {
    let sorted = values;
    let iqr = q3 - q1;
    let (lo1, hi1) = (q1 - TUKEY_OUTSIDE * iqr, q3 + TUKEY_OUTSIDE * iqr);
    let (lo3, hi3) = (q1 - TUKEY_FAR * iqr, q3 + TUKEY_FAR * iqr);
    let (mut outside, mut far, mut mad) = (0u32, 0u32, 0u32);
    for &x in sorted {
        if x < lo1 || x > hi1 {
            outside += 1;
        }
        if x < lo3 || x > hi3 {
            far += 1;
        }
        if madn > 0.0 && (x - m).abs() / madn > MAD_MEDIAN_K {
            mad += 1;
        }
    }
    let max_mad_score = if madn > 0.0 {
        let lo = sorted.iter().copied().fold(m, f64::min);
        let hi = sorted.iter().copied().fold(m, f64::max);
        (m - lo).max(hi - m) / madn
    } else {
        f64::NAN
    };
    ScreenCounts { outside, far, mad, madn, max_mad_score }
}

/// Screens one cell (values in input order): Tukey's fences at 1.5 and 3 × IQR on
/// type-7 quartiles (Tukey 1977; Hyndman & Fan 1996) and the MAD–median rule with
/// K = 2.24 (Wilcox 2017). Points exactly on a fence are not flagged. With MADN = 0
/// the MAD–median rule does not apply (`mad = None`). An empty cell gives NaN
/// summaries and no points.
pub fn screen(values: &[f64]) -> CellScreen {
    screen_given_sorted(values, &summary::sorted(values))
}

/// [`screen`] given the same values sorted ascending (positions refer to `values`).
pub fn screen_given_sorted(values: &[f64], sorted: &[f64]) -> CellScreen {
    let (q1, q3, median, madn) = robust_summary(sorted);
    let iqr = q3 - q1;
    let beyond = |k: f64| -> Vec<usize> {
        let (lo, hi) = (q1 - k * iqr, q3 + k * iqr);
        (0..values.len()).filter(|&i| values[i] < lo || values[i] > hi).collect()
    };
    let mad =
        (madn > 0.0).then(|| (0..values.len()).filter(|&i| (values[i] - median).abs() / madn > MAD_MEDIAN_K).collect());
    CellScreen { q1, q3, median, madn, outside: beyond(TUKEY_OUTSIDE), far: beyond(TUKEY_FAR), mad }
}

/// The n-adjusted scale of the MAD–median score: under normality |x − M|/MADN for a
/// cell of n values behaves roughly like s_n·|t_ν| with s_n = √(1 + π/(2n)) (the
/// sampling variance of the median, π/(2n)) and ν = n/2.72 (the variance of ln MADN is
/// about 1.36/n; asymptotic variances of the median and MAD, e.g. Wilcox 2017 ch. 3).
/// This only puts cells of different sizes on a common scale; the cut-off itself is
/// calibrated by simulation ([`super::calibration`]). Toolkit convention.
pub fn mad_score_tail(score: f64, n: usize) -> f64 {
    let nf = n.max(2) as f64;
    let s = (1.0 + std::f64::consts::PI / (2.0 * nf)).sqrt();
    let nu = nf / 2.72;
    (2.0 * dist::t_sf(score / s, nu)).min(1.0)
}

/// The MAD-score cut-off in a cell of n values that corresponds to tail level `q`
/// (the inverse of [`mad_score_tail`]).
pub fn mad_cutoff_for_tail(q: f64, n: usize) -> f64 {
    let nf = n.max(2) as f64;
    let s = (1.0 + std::f64::consts::PI / (2.0 * nf)).sqrt();
    let nu = nf / 2.72;
    s * dist::t_quantile(1.0 - q / 2.0, nu)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn abs_deviation_order_statistics_match_sorting() {
        let mut x: u64 = 0x2545_F491_4F6C_DD1D;
        for case in 0..400 {
            let n = 1 + case % 37;
            let mut v: Vec<f64> = (0..n)
                .map(|_| {
                    x ^= x << 13;
                    x ^= x >> 7;
                    x ^= x << 17;
                    if case % 3 == 0 {
                        (x % 5) as f64 // heavy ties, values equal to the median
                    } else {
                        (x % 100_000) as f64 / 997.0 - 40.0
                    }
                })
                .collect();
            v.sort_by(f64::total_cmp);
            let m = summary::median_sorted(&v);
            let mut d: Vec<f64> = v.iter().map(|y| (y - m).abs()).collect();
            d.sort_by(f64::total_cmp);
            for (k, &want) in d.iter().enumerate() {
                assert_eq!(kth_abs_deviation(&v, m, k).to_bits(), want.to_bits(), "n {n}, k {k}, {v:?}");
            }
        }
    }

    #[test]
    fn methods_12_1_cell_a2b1() {
        // METHODS §12.1: cell a2b1, fences 8.95 and 10.55 (type 7), Tukey 1.5 and the
        // MAD–median rule flag only 13.8 (position 0); MADN = 0.3706505546.
        let s = screen(&[13.8, 9.6, 9.4, 9.9, 9.2, 10.1, 9.8, 9.9]);
        assert!((s.q1 - 9.55).abs() < 1e-12 && (s.q3 - 9.95).abs() < 1e-12);
        let (lo, hi) = s.fences(TUKEY_OUTSIDE);
        assert!((lo - 8.95).abs() < 1e-12 && (hi - 10.55).abs() < 1e-12);
        assert_eq!(s.outside, vec![0]);
        assert_eq!(s.mad, Some(vec![0]));
        assert!((s.madn - 0.3706505546).abs() < 1e-9);
        // 13.8 is 3.85 above Q3 with IQR 0.4: far out too (beyond 11.15).
        assert_eq!(s.far, vec![0]);
    }

    #[test]
    fn counts_match_the_full_screen() {
        let v = [13.8, 9.6, 9.4, 9.9, 9.2, 10.1, 9.8, 9.9, 2.0];
        let s = screen(&v);
        let mut scratch = Vec::new();
        let c = screen_sorted(&summary::sorted(&v));
        assert_eq!(c.outside as usize, s.outside.len());
        assert_eq!(c.far as usize, s.far.len());
        assert_eq!(c.mad as usize, s.flagged(Rule::MadMedian).len());
        // Selection gives the same order statistics as sorting, so identical results.
        for data in [
            v.to_vec(),
            vec![3.0, 1.0, 2.0, 2.0],
            vec![5.0],
            vec![1.0, 9.0],
            (0..101).map(|i| ((i * 37) % 101) as f64).collect(),
        ] {
            let mut work = data.clone();
            let u = screen_unsorted(&mut work, &mut scratch);
            let t = screen_sorted(&summary::sorted(&data));
            assert_eq!((u.outside, u.far, u.mad, u.madn), (t.outside, t.far, t.mad, t.madn), "{data:?}");
            assert!(u.max_mad_score == t.max_mad_score || (u.max_mad_score.is_nan() && t.max_mad_score.is_nan()));
        }
    }

    #[test]
    fn zero_mad_makes_the_rule_not_applicable() {
        let s = screen(&[1.0, 1.0, 1.0, 5.0]);
        assert_eq!(s.mad, None);
        assert!(s.flagged(Rule::MadMedian).is_empty());
    }

    #[test]
    fn tail_and_cutoff_are_inverse() {
        for n in [3usize, 5, 20, 200] {
            let k = mad_cutoff_for_tail(0.001, n);
            assert!((mad_score_tail(k, n) - 0.001).abs() < 1e-9, "n = {n}");
        }
    }
}
