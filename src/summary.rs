//! Sample statistics used across quorum: quantiles, medians, trimmed and winsorized
//! summaries, and bias-adjusted skewness and kurtosis with their standard errors.
//!
//! Each function states its convention, because small cells make conventions matter:
//! quantiles are Hyndman & Fan (1996) type 7 (numpy's default), trimming takes
//! g = ⌊γ·n⌋ computed as the floor of the double product (as numpy, scipy and
//! statsmodels do), variances use the n − 1 denominator.

/// Sorted copy of `x` (total order; NaN never occurs in quorum's data).
pub fn sorted(x: &[f64]) -> Vec<f64> {
    let mut v = x.to_vec();
    v.sort_unstable_by(f64::total_cmp);
    v
}

/// A value's bits mapped so that unsigned order is [`f64::total_cmp`] order (for sort
/// keys).
pub fn total_order_key(v: f64) -> u64 {
    // Negative values have every bit flipped, others only the sign bit; without a
    // branch, as the sign of residuals is a coin toss for the branch predictor.
    let b = v.to_bits();
    let negative = ((b as i64) >> 63) as u64;
    b ^ (negative | (1 << 63))
}

/// Sorted runs merged: `items[bounds[k]..bounds[k + 1]]` is ascending in `key` for
/// every k (`bounds` starts at 0 and ends at `items.len()`); returns every item in
/// ascending order of `key`, items of equal key in run order (a stable merge).
/// Neighbouring runs are merged in pairs, level by level, and a long merge is split in
/// two at its middle rank, the halves side by side on the rayon pool; the result does
/// not depend on the number of threads.
pub fn merge_sorted_runs<T, K>(items: Vec<T>, bounds: &[usize], key: K) -> Vec<T>
where
    T: Copy + Default + Send + Sync,
    K: Fn(&T) -> u64 + Copy + Send + Sync,
{
    use rayon::prelude::*;
    let mut bounds: Vec<usize> = bounds.to_vec();
    let mut a = items;
    let mut b = vec![T::default(); a.len()];
    while bounds.len() > 2 {
        let runs = bounds.len() - 1;
        let mut jobs: Vec<(&[T], &[T], &mut [T])> = Vec::with_capacity(runs.div_ceil(2));
        let mut out_rest = b.as_mut_slice();
        for k in (0..runs).step_by(2) {
            let (start, mid, end) = (bounds[k], bounds[(k + 1).min(runs)], bounds[(k + 2).min(runs)]);
            let (out, tail) = out_rest.split_at_mut(end - start);
            out_rest = tail;
            jobs.push((&a[start..mid], &a[mid..end], out));
        }
        jobs.into_par_iter().for_each(|(left, right, out)| merge_into(left, right, out, key));
        bounds = bounds.iter().copied().step_by(2).chain((runs % 2 == 1).then_some(bounds[runs])).collect();
        std::mem::swap(&mut a, &mut b);
    }
    a
}

/// Merges two runs ascending in `key` into `out` (left first among equal keys),
/// splitting long merges at the middle output rank for the rayon pool.
fn merge_into<T, K>(left: &[T], right: &[T], out: &mut [T], key: K)
where
    T: Copy + Send + Sync,
    K: Fn(&T) -> u64 + Copy + Send + Sync,
{
    const SPLIT: usize = 1 << 16;
    if out.len() > SPLIT && !left.is_empty() && !right.is_empty() {
        let p = out.len() / 2;
        let i = co_rank(left, right, p, key);
        let (left_lo, left_hi) = left.split_at(i);
        let (right_lo, right_hi) = right.split_at(p - i);
        let (out_lo, out_hi) = out.split_at_mut(p);
        rayon::join(|| merge_into(left_lo, right_lo, out_lo, key), || merge_into(left_hi, right_hi, out_hi, key));
        return;
    }
    let (mut i, mut j) = (0, 0);
    let mut k = 0;
    while i < left.len() && j < right.len() {
        let take_right = key(&right[j]) < key(&left[i]);
        out[k] = if take_right { right[j] } else { left[i] };
        j += usize::from(take_right);
        i += usize::from(!take_right);
        k += 1;
    }
    out[k..k + left.len() - i].copy_from_slice(&left[i..]);
    k += left.len() - i;
    out[k..].copy_from_slice(&right[j..]);
}

/// How many of the first `p` merged items come from `left` (left first among equal
/// keys): the smallest i with left[i] after right[p − i − 1].
fn co_rank<T>(left: &[T], right: &[T], p: usize, key: impl Fn(&T) -> u64) -> usize {
    let (mut lo, mut hi) = (p.saturating_sub(right.len()), p.min(left.len()));
    while lo < hi {
        let i = lo + (hi - lo) / 2;
        if key(&left[i]) <= key(&right[p - i - 1]) {
            lo = i + 1;
        } else {
            hi = i;
        }
    }
    lo
}

/// Quantile of sorted data, Hyndman & Fan (1996, The American Statistician 50:361–365)
/// type 7: h = (n − 1)p + 1, Q = x_(⌊h⌋) + (h − ⌊h⌋)(x_(⌊h⌋+1) − x_(⌊h⌋)).
/// NaN for empty data or p outside [0, 1].
pub fn quantile_type7(sorted: &[f64], p: f64) -> f64 {
    let n = sorted.len();
    if n == 0 || !(0.0..=1.0).contains(&p) {
        return f64::NAN;
    }
    let h = (n - 1) as f64 * p;
    let lo = h.floor() as usize;
    let frac = h - lo as f64;
    if lo + 1 >= n {
        sorted[n - 1]
    } else {
        sorted[lo] + frac * (sorted[lo + 1] - sorted[lo])
    }
}

/// Median of sorted data (mean of the two middle values for even n).
pub fn median_sorted(sorted: &[f64]) -> f64 {
    let n = sorted.len();
    if n == 0 {
        return f64::NAN;
    }
    if n % 2 == 1 {
        sorted[n / 2]
    } else {
        0.5 * (sorted[n / 2 - 1] + sorted[n / 2])
    }
}

/// Number trimmed from each end: g = ⌊γ·n⌋, the floor of the IEEE-754 double product
/// (METHODS §4.1; e.g. 0.29·100 = 28.999… gives 28, as in numpy/scipy/statsmodels).
pub fn trim_count(gamma: f64, n: usize) -> usize {
    (gamma * n as f64).floor() as usize
}

/// Trimmed mean of sorted data: the mean of x_(g+1) … x_(n−g). NaN when nothing is left.
pub fn trimmed_mean_sorted(sorted: &[f64], gamma: f64) -> f64 {
    let n = sorted.len();
    let g = trim_count(gamma, n);
    if n == 0 || 2 * g >= n {
        return f64::NAN;
    }
    let kept = &sorted[g..n - g];
    crate::model::mean_two_pass(kept)
}

/// Winsorized variance of sorted data with the same g as the trimmed mean: x_(i) for
/// i ≤ g replaced by x_(g+1) and for i > n − g by x_(n−g); denominator n − 1 (Yuen 1974).
/// NaN for n < 2 or when nothing is left after trimming.
pub fn winsorized_variance_sorted(sorted: &[f64], gamma: f64) -> f64 {
    let n = sorted.len();
    let g = trim_count(gamma, n);
    if n < 2 || 2 * g >= n {
        return f64::NAN;
    }
    let lo = sorted[g];
    let hi = sorted[n - g - 1];
    let w = |x: f64| x.clamp(lo, hi);
    let mean = crate::model::mean_two_pass(&sorted.iter().map(|&x| w(x)).collect::<Vec<_>>());
    sorted.iter().map(|&x| (w(x) - mean).powi(2)).sum::<f64>() / (n - 1) as f64
}

/// The order-based summaries of the cell table in O(n): extremes, median, trimmed mean
/// and winsorized variance (same conventions as the functions above).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct OrderSummary {
    /// Smallest value.
    pub min: f64,
    /// Largest value.
    pub max: f64,
    /// Median (mean of the two middle values for even n).
    pub median: f64,
    /// γ-trimmed mean ([`trimmed_mean_sorted`]); NaN when nothing is left.
    pub trimmed_mean: f64,
    /// γ-winsorized variance ([`winsorized_variance_sorted`]); NaN for n < 2.
    pub winsorized_variance: f64,
}

/// Cells up to this size are simply sorted; larger ones use selection.
const SORT_SMALL: usize = 64;

/// [`OrderSummary`] of `x` by selection (`select_nth_unstable`) instead of a full sort,
/// so that a million-row design costs O(N). Empty input gives NaN everywhere.
pub fn order_summary(x: &[f64], gamma: f64) -> OrderSummary {
    let n = x.len();
    if n == 0 {
        return OrderSummary {
            min: f64::NAN,
            max: f64::NAN,
            median: f64::NAN,
            trimmed_mean: f64::NAN,
            winsorized_variance: f64::NAN,
        };
    }
    if n <= SORT_SMALL {
        return order_summary_sorted(&sorted(x), gamma);
    }
    let cmp = |a: &f64, b: &f64| a.total_cmp(b);
    let mut v = x.to_vec();
    let min = x.iter().copied().fold(f64::INFINITY, f64::min);
    let max = x.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let (left, &mut upper_mid, _) = v.select_nth_unstable_by(n / 2, cmp);
    let median = if n % 2 == 1 {
        upper_mid
    } else {
        let lower_mid = left.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        0.5 * (lower_mid + upper_mid)
    };
    let g = trim_count(gamma, n);
    if 2 * g >= n {
        return OrderSummary { min, max, median, trimmed_mean: f64::NAN, winsorized_variance: f64::NAN };
    }
    // Place the order statistics g and n−1−g; between them lie the kept values.
    v.select_nth_unstable_by(g, cmp);
    let (lo, rest) = v.split_at_mut(g + 1);
    if n - 1 - g > g {
        rest.select_nth_unstable_by(n - 2 - 2 * g, cmp);
    }
    let low = lo[g];
    let high = v[n - 1 - g];
    let trimmed_mean = crate::model::mean_two_pass(&v[g..n - g]);
    let wins: Vec<f64> = x.iter().map(|&z| z.clamp(low, high)).collect();
    OrderSummary { min, max, median, trimmed_mean, winsorized_variance: variance(&wins) }
}

/// [`OrderSummary`] of values sorted ascending. Empty input gives NaN everywhere.
pub fn order_summary_sorted(s: &[f64], gamma: f64) -> OrderSummary {
    let n = s.len();
    if n == 0 {
        return order_summary(s, gamma);
    }
    OrderSummary {
        min: s[0],
        max: s[n - 1],
        median: median_sorted(s),
        trimmed_mean: trimmed_mean_sorted(s, gamma),
        winsorized_variance: winsorized_variance_sorted(s, gamma),
    }
}

/// Sample variance with n − 1 denominator (two-pass); NaN for n < 2.
pub fn variance(x: &[f64]) -> f64 {
    if x.len() < 2 {
        return f64::NAN;
    }
    let m = crate::model::mean_two_pass(x);
    x.iter().map(|v| (v - m).powi(2)).sum::<f64>() / (x.len() - 1) as f64
}

/// Central moments m2, m3, m4 with the 1/n divisor.
fn central_moments(x: &[f64]) -> (f64, f64, f64) {
    central_moments_of(x.len(), x.iter().copied())
}

/// Central moments m2, m3, m4 of the `n` values `x` yields: the mean with a correction
/// pass (as [`crate::model::mean_two_pass`]), then one pass of powers.
fn central_moments_of<I: Iterator<Item = f64> + Clone>(n: usize, x: I) -> (f64, f64, f64) {
    let n = n as f64;
    let m0 = x.clone().sum::<f64>() / n;
    let m = m0 + x.clone().map(|v| v - m0).sum::<f64>() / n;
    let (mut m2, mut m3, mut m4) = (0.0, 0.0, 0.0);
    for v in x {
        let d = v - m;
        let d2 = d * d;
        m2 += d2;
        m3 += d2 * d;
        m4 += d2 * d2;
    }
    (m2 / n, m3 / n, m4 / n)
}

/// Bias-adjusted skewness G1 = g1·√(n(n−1))/(n−2), g1 = m3/m2^{3/2}
/// (Joanes & Gill 1998, The Statistician 47:183–189; scipy `skew(bias=False)`).
/// `None` for n < 3 or constant data.
pub fn skewness(x: &[f64]) -> Option<f64> {
    if x.len() < 3 {
        return None;
    }
    skewness_from(x.len(), central_moments(x))
}

fn skewness_from(n: usize, (m2, m3, _): (f64, f64, f64)) -> Option<f64> {
    if n < 3 || m2 <= 0.0 {
        return None;
    }
    let nf = n as f64;
    let g1 = m3 / m2.powf(1.5);
    Some(g1 * (nf * (nf - 1.0)).sqrt() / (nf - 2.0))
}

/// [`skewness`] and [`excess_kurtosis`] from one pass of central moments (the same
/// numbers as the two calls).
pub fn skewness_and_kurtosis(x: &[f64]) -> (Option<f64>, Option<f64>) {
    skewness_and_kurtosis_of(x.len(), x.iter().copied())
}

/// [`skewness_and_kurtosis`] of the `n` values `x` yields (walked three times), without
/// collecting them: the same numbers as the slice of those values in that order.
pub fn skewness_and_kurtosis_of<I: Iterator<Item = f64> + Clone>(n: usize, x: I) -> (Option<f64>, Option<f64>) {
    if n < 3 {
        return (None, None);
    }
    let moments = central_moments_of(n, x);
    (skewness_from(n, moments), kurtosis_from(n, moments))
}

/// Bias-adjusted excess kurtosis G2 = [(n+1)g2 + 6](n−1)/((n−2)(n−3)), g2 = m4/m2² − 3
/// (Joanes & Gill 1998; scipy `kurtosis(bias=False)`). `None` for n < 4 or constant data.
pub fn excess_kurtosis(x: &[f64]) -> Option<f64> {
    if x.len() < 4 {
        return None;
    }
    kurtosis_from(x.len(), central_moments(x))
}

fn kurtosis_from(n: usize, (m2, _, m4): (f64, f64, f64)) -> Option<f64> {
    if n < 4 || m2 <= 0.0 {
        return None;
    }
    let nf = n as f64;
    let g2 = m4 / (m2 * m2) - 3.0;
    Some(((nf + 1.0) * g2 + 6.0) * (nf - 1.0) / ((nf - 2.0) * (nf - 3.0)))
}

/// Standard error of G1 under normality, √(6n(n−1)/((n−2)(n+1)(n+3))) (exact; Joanes &
/// Gill 1998). `None` for n < 3.
pub fn skewness_se(n: usize) -> Option<f64> {
    if n < 3 {
        return None;
    }
    let n = n as f64;
    Some((6.0 * n * (n - 1.0) / ((n - 2.0) * (n + 1.0) * (n + 3.0))).sqrt())
}

/// Standard error of G2 under normality, 2·SE_G1·√((n²−1)/((n−3)(n+5))). `None` for n < 4.
pub fn excess_kurtosis_se(n: usize) -> Option<f64> {
    if n < 4 {
        return None;
    }
    let se1 = skewness_se(n)?;
    let nf = n as f64;
    Some(2.0 * se1 * ((nf * nf - 1.0) / ((nf - 3.0) * (nf + 5.0))).sqrt())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn total_order_keys_sort_as_total_cmp() {
        let v = [
            f64::NAN,
            -f64::NAN,
            f64::INFINITY,
            f64::NEG_INFINITY,
            f64::MAX,
            f64::MIN,
            -0.0,
            0.0,
            f64::MIN_POSITIVE,
            -f64::MIN_POSITIVE,
            5e-324,
            -5e-324,
            1.5,
            -1.5,
            1.0 + f64::EPSILON,
        ];
        for a in v {
            for b in v {
                assert_eq!(total_order_key(a).cmp(&total_order_key(b)), a.total_cmp(&b), "{a} {b}");
            }
        }
    }

    #[test]
    fn moments_of_an_iterator_equal_those_of_the_collected_slice() {
        let cells: Vec<Vec<f64>> = vec![vec![1e6 + 0.1, 1e6 + 0.7, 1e6 - 3.0], vec![], vec![2.5, -0.0, 9.25, 1e-3]];
        let walk = || cells.iter().flat_map(|c| c.iter().map(|&v| v * 0.5 - 1.0));
        let collected: Vec<f64> = walk().collect();
        let (a, b) = (skewness_and_kurtosis(&collected), skewness_and_kurtosis_of(collected.len(), walk()));
        assert_eq!(a.0.map(f64::to_bits), b.0.map(f64::to_bits));
        assert_eq!(a.1.map(f64::to_bits), b.1.map(f64::to_bits));
        assert!(a.0.is_some() && a.1.is_some());
        // And the mean inside is the two-pass mean.
        let m = crate::model::mean_two_pass(&collected);
        let n = collected.len() as f64;
        let m2: f64 = collected.iter().map(|v| (v - m) * (v - m)).sum::<f64>() / n;
        assert_eq!(central_moments(&collected).0.to_bits(), m2.to_bits());
    }

    #[test]
    fn merging_sorted_runs_equals_a_stable_sort_on_any_thread_count() {
        // Runs of very unequal lengths (one empty, one of a single value), values tied
        // within and across runs, signed zeros; long enough for the split merges.
        let mut x: u64 = 0x2545_F491_4F6C_DD1D;
        let lengths = [70_000usize, 3, 0, 41_000, 1, 150_000, 9];
        let mut items: Vec<(f64, u32)> = Vec::new();
        let mut bounds = vec![0];
        for (r, &n) in lengths.iter().enumerate() {
            let mut run: Vec<f64> = (0..n)
                .map(|i| {
                    x ^= x << 13;
                    x ^= x >> 7;
                    x ^= x << 17;
                    match i % 5 {
                        0 => -0.0,
                        1 => 0.0,
                        _ => (x % 400) as f64 / 4.0 - 50.0,
                    }
                })
                .collect();
            run.sort_by(f64::total_cmp);
            items.extend(run.into_iter().map(|v| (v, r as u32)));
            bounds.push(items.len());
        }
        let mut want = items.clone();
        want.sort_by(|a, b| a.0.total_cmp(&b.0)); // stable: equal values stay in run order
        let want: Vec<(u64, u32)> = want.iter().map(|e| (e.0.to_bits(), e.1)).collect();
        for threads in [1, 2, 5] {
            let pool = rayon::ThreadPoolBuilder::new().num_threads(threads).build().unwrap();
            let got = pool.install(|| merge_sorted_runs(items.clone(), &bounds, |e: &(f64, u32)| total_order_key(e.0)));
            let got: Vec<(u64, u32)> = got.iter().map(|e| (e.0.to_bits(), e.1)).collect();
            assert_eq!(got, want, "{threads} threads");
        }
        // One run, and none.
        assert_eq!(merge_sorted_runs(vec![1.0, 2.0], &[0, 2], |&v: &f64| total_order_key(v)), vec![1.0, 2.0]);
        assert!(merge_sorted_runs(Vec::<f64>::new(), &[0], |&v: &f64| total_order_key(v)).is_empty());
    }

    #[test]
    fn one_moment_pass_gives_both_shapes_exactly() {
        for x in [vec![1.0, 2.0, 4.0, 8.0, 16.5, -3.0], vec![0.1, 0.2, 0.3], vec![5.0, 5.0, 5.0, 5.0], vec![1.0, 2.0]] {
            let (g1, g2) = skewness_and_kurtosis(&x);
            assert_eq!(g1.map(f64::to_bits), skewness(&x).map(f64::to_bits));
            assert_eq!(g2.map(f64::to_bits), excess_kurtosis(&x).map(f64::to_bits));
        }
    }

    #[test]
    fn type7_quantiles_match_numpy_linear() {
        // numpy.percentile([9.6, 10.2, 9.9, 10.0, 9.2], [25, 75]) = [9.6, 10.0] (METHODS §12.1, cell a1b1).
        let s = sorted(&[9.6, 10.2, 9.9, 10.0, 9.2]);
        assert_eq!(quantile_type7(&s, 0.25), 9.6);
        assert_eq!(quantile_type7(&s, 0.75), 10.0);
        assert_eq!(median_sorted(&s), 9.9);
    }

    #[test]
    fn trim_count_uses_the_double_product() {
        // METHODS §4.1: 0.29·100 = 28.999… → 28.
        assert_eq!(trim_count(0.29, 100), 28);
        assert_eq!(trim_count(0.2, 5), 1);
        assert_eq!(trim_count(0.2, 4), 0);
    }

    #[test]
    fn standard_errors_at_n_5() {
        // METHODS §12.1: n = 5: SE_G1 = 0.9128709292, SE_G2 = 2.0.
        assert!((skewness_se(5).unwrap() - 0.9128709292).abs() < 1e-10);
        assert!((excess_kurtosis_se(5).unwrap() - 2.0).abs() < 1e-12);
        assert_eq!(skewness_se(2), None);
        assert_eq!(excess_kurtosis_se(3), None);
    }

    #[test]
    fn selection_equals_sorting() {
        // Property: the O(n) selection path gives the sorted path's values.
        let mut x: u64 = 99;
        for n in [65usize, 66, 100, 257, 1000] {
            let data: Vec<f64> = (0..n)
                .map(|_| {
                    x ^= x << 13;
                    x ^= x >> 7;
                    x ^= x << 17;
                    ((x % 1000) as f64) / 10.0
                })
                .collect();
            for gamma in [0.0, 0.1, 0.2, 0.49] {
                let fast = order_summary(&data, gamma);
                let s = sorted(&data);
                let close = |a: f64, b: f64| (a - b).abs() <= 1e-12 * b.abs().max(1.0);
                assert_eq!(fast.min, s[0]);
                assert_eq!(fast.max, s[n - 1]);
                assert_eq!(fast.median, median_sorted(&s));
                assert!(close(fast.trimmed_mean, trimmed_mean_sorted(&s, gamma)), "n {n} γ {gamma}");
                assert!(close(fast.winsorized_variance, winsorized_variance_sorted(&s, gamma)), "n {n} γ {gamma}");
            }
        }
    }

    #[test]
    fn degenerate_inputs_give_none_or_nan() {
        assert_eq!(skewness(&[1.0, 1.0, 1.0]), None);
        assert_eq!(excess_kurtosis(&[1.0, 2.0, 3.0]), None);
        assert!(quantile_type7(&[], 0.5).is_nan());
        assert!(trimmed_mean_sorted(&[], 0.2).is_nan());
        assert!(winsorized_variance_sorted(&[1.0], 0.2).is_nan());
    }
}
