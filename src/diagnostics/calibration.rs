//! Calibration of the diagnostic flags by a design-matched null simulation.
//!
//! A flag such as "more outliers than expected" or "unequal variances" must not fire on
//! most clean datasets (METHODS Overrides 8): the raw rules of thumb (any MAD–median
//! point, any cell G2 > 3, a variance ratio > 1.5) fire on 70–99% of normal,
//! equal-variance datasets with 5 to 50 values per cell. So every statistic a flag uses
//! is compared with its own sampling distribution under the null model "normal errors,
//! equal variances, these cell sizes": quorum simulates R such datasets with the user's
//! cell sizes, computes the same statistics, and turns the observed value into a Monte
//! Carlo p-value p = (1 + #{simulated ≥ observed})/(R + 1) (Barnard 1963; Hope 1968).
//! A flag fires when p ≤ [`FLAG_LEVEL`], so under the null model it fires on at most
//! that share of datasets whatever the design. Every statistic used is invariant to
//! the cell means and to a common scale, so the null model has no free parameter.
//!
//! Draws come from quorum's own streams (`Purpose::Auxiliary`, chunked as in METHODS
//! §10), so results do not depend on the thread count. Normal variates are made by
//! the Box–Muller transform of two uniform doubles (Box & Muller 1958).

use super::outliers::{mad_score_tail, screen_unsorted, ScreenCounts};
use crate::resample::{par_chunks, Purpose, Stream};

/// Share of null datasets on which a calibrated flag may fire (Monte Carlo test level).
/// Five calibrated flags at 1% each keep "any flag" on clean data near 5%.
pub const FLAG_LEVEL: f64 = 0.01;
/// Share of null datasets from which the calibrated MAD–median drop rule
/// (`--drop-rule mad`) removes at least one point.
pub const DROP_LEVEL: f64 = 0.05;
/// Sub-stream word of the diagnostics simulation ("DIAG"), so that other auxiliary
/// draws never share its random numbers.
pub const AUX_DIAGNOSTICS: u64 = 0x4449_4147;

/// Simulated datasets for a design of `n_obs` observations: 1999, fewer for large
/// designs (the cost is about R·N: about 0.2 s at 10 000 rows and 6 s at a million
/// rows on one core of the development machine; designs whose every cell is large use
/// [`super::large_sample`] instead, see [`NullReference::for_design`]). (R + 1)·[`FLAG_LEVEL`] and
/// (R + 1)·[`DROP_LEVEL`] stay whole numbers, so the Monte Carlo tests are exact at
/// every size; the realised false-flag rate of one seed scatters around the level by
/// about √(level/R) (0.2 percentage points at R = 1999).
pub fn null_datasets(n_obs: usize) -> u64 {
    match n_obs {
        0..=5_000 => 1999,
        5_001..=20_000 => 999,
        20_001..=100_000 => 499,
        _ => 199,
    }
}

/// The statistics of one dataset that the flags use.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct DatasetStats {
    /// Bias-adjusted skewness G1 of the pooled residuals y − ȳ_c (NaN when undefined).
    pub residual_g1: f64,
    /// Bias-adjusted excess kurtosis G2 of the pooled residuals (NaN when undefined).
    pub residual_g2: f64,
    /// Largest over smallest cell variance among cells with n ≥ 2 (NaN with fewer than
    /// two such cells, ∞ when one is 0).
    pub variance_ratio: f64,
    /// Largest over smallest MADN² among cells with n ≥ 2 (NaN/∞ as above).
    pub robust_variance_ratio: f64,
    /// Points beyond the 1.5 × IQR fences, all cells.
    pub outside: u32,
    /// Points beyond the 3 × IQR fences, all cells.
    pub far: u32,
    /// Points flagged by the MAD–median rule (K = 2.24), all cells.
    pub mad: u32,
    /// Smallest n-adjusted tail level of any point's MAD score (1 when no cell has MADN > 0).
    pub min_mad_tail: f64,
}

/// Reusable buffers for [`dataset_stats`].
#[derive(Debug, Default)]
pub struct Buffers {
    work: Vec<f64>,
    scratch: Vec<f64>,
}

/// G1 and G2 (Joanes & Gill 1998) from central moments with divisor n.
pub fn g1_g2(n: usize, m2: f64, m3: f64, m4: f64) -> (f64, f64) {
    let nf = n as f64;
    if m2.is_nan() || m2 <= 0.0 {
        return (f64::NAN, f64::NAN);
    }
    let g1 = if n >= 3 { m3 / m2.powf(1.5) * (nf * (nf - 1.0)).sqrt() / (nf - 2.0) } else { f64::NAN };
    let g2 = if n >= 4 {
        ((nf + 1.0) * (m4 / (m2 * m2) - 3.0) + 6.0) * (nf - 1.0) / ((nf - 2.0) * (nf - 3.0))
    } else {
        f64::NAN
    };
    (g1, g2)
}

/// The flag statistics of a dataset given cell by cell (any order of values in a cell).
pub fn dataset_stats<'a>(cells: impl Iterator<Item = &'a [f64]>, buf: &mut Buffers) -> DatasetStats {
    let counted = cells.map(|x| {
        buf.work.clear();
        buf.work.extend_from_slice(x);
        (x, screen_unsorted(&mut buf.work, &mut buf.scratch))
    });
    // The screening buffers are borrowed by the iterator, so the moments need none.
    accumulate(counted.collect::<Vec<_>>().into_iter())
}

/// [`dataset_stats`] of cells whose screening counts are known (`counts[c]` of
/// `cells[c]`, e.g. from [`super::outliers::CellScreen::counts`]): only the moments are
/// summed, over `cells` in their own order.
pub fn dataset_stats_from_counts(cells: &[&[f64]], counts: &[ScreenCounts]) -> DatasetStats {
    accumulate(cells.iter().copied().zip(counts.iter().copied()))
}

fn accumulate<'a>(cells: impl Iterator<Item = (&'a [f64], ScreenCounts)>) -> DatasetStats {
    let (mut s2, mut s3, mut s4) = (0.0, 0.0, 0.0);
    let mut n_total = 0usize;
    let (mut v_max, mut v_min, mut v_cells) = (f64::NEG_INFINITY, f64::INFINITY, 0usize);
    let (mut r_max, mut r_min) = (f64::NEG_INFINITY, f64::INFINITY);
    let (mut outside, mut far, mut mad) = (0u32, 0u32, 0u32);
    let mut min_tail = 1.0f64;
    for (x, counts) in cells {
        let n = x.len();
        if n == 0 {
            continue;
        }
        n_total += n;
        let m = crate::model::mean_two_pass(x);
        let mut c2 = 0.0;
        for &v in x {
            let d = v - m;
            let d2 = d * d;
            c2 += d2;
            s3 += d2 * d;
            s4 += d2 * d2;
        }
        s2 += c2;
        outside += counts.outside;
        far += counts.far;
        mad += counts.mad;
        if n >= 2 {
            let var = c2 / (n - 1) as f64;
            v_cells += 1;
            v_max = v_max.max(var);
            v_min = v_min.min(var);
            let r = counts.madn * counts.madn;
            r_max = r_max.max(r);
            r_min = r_min.min(r);
        }
        if counts.madn > 0.0 && counts.max_mad_score.is_finite() {
            min_tail = min_tail.min(mad_score_tail(counts.max_mad_score, n));
        }
    }
    let nf = n_total as f64;
    let (g1, g2) = if n_total > 0 { g1_g2(n_total, s2 / nf, s3 / nf, s4 / nf) } else { (f64::NAN, f64::NAN) };
    let ratio = |max: f64, min: f64| {
        if v_cells < 2 {
            f64::NAN
        } else if min > 0.0 {
            max / min
        } else {
            f64::INFINITY
        }
    };
    DatasetStats {
        residual_g1: g1,
        residual_g2: g2,
        variance_ratio: ratio(v_max, v_min),
        robust_variance_ratio: ratio(r_max, r_min),
        outside,
        far,
        mad,
        min_mad_tail: min_tail,
    }
}

/// Fills `out` with standard normal variates (Box–Muller; uniforms in (0, 1) from the
/// top 53 bits of each output word, offset by half a step so that ln never sees 0).
pub fn fill_normal(stream: &mut Stream, out: &mut [f64]) {
    let mut pairs = out.chunks_mut(2);
    for pair in &mut pairs {
        let u1 = stream.open_uniform();
        let u2 = stream.open_uniform();
        let r = (-2.0 * u1.ln()).sqrt();
        let (s, c) = (std::f64::consts::TAU * u2).sin_cos();
        pair[0] = r * c;
        if pair.len() > 1 {
            pair[1] = r * s;
        }
    }
}

/// How the null distribution of the flag statistics was obtained.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum NullMethod {
    /// R normal datasets of the design's cell sizes, simulated value by value.
    Simulation,
    /// R draws of the statistics from their large-sample distributions
    /// ([`super::large_sample`]; every cell has at least
    /// [`super::large_sample::LARGE_CELL`] observations).
    LargeSample,
}

/// The flag statistics of R simulated normal, equal-variance datasets with the given
/// cell sizes.
#[derive(Debug, Clone)]
pub struct NullReference {
    /// Simulated datasets R.
    pub datasets: u64,
    /// Statistics of each simulated dataset, in simulation order.
    pub stats: Vec<DatasetStats>,
    /// How they were simulated.
    pub method: NullMethod,
}

impl NullReference {
    /// The reference `diagnose` uses for cell sizes `sizes`: the large-sample draws when
    /// every non-empty cell has at least [`super::large_sample::LARGE_CELL`]
    /// observations ([`super::large_sample::LARGE_SAMPLE_DATASETS`] datasets), else the
    /// exact simulation with [`null_datasets`] datasets.
    pub fn for_design(sizes: &[usize], seed: u64) -> NullReference {
        if super::large_sample::applies(sizes) {
            NullReference::large_sample(sizes, seed, super::large_sample::LARGE_SAMPLE_DATASETS)
        } else {
            NullReference::simulate(sizes, seed, null_datasets(sizes.iter().sum()))
        }
    }

    /// R = `datasets` draws from the large-sample distributions for cell sizes `sizes`
    /// (meaningful only when every non-empty cell is large, see [`super::large_sample`]).
    pub fn large_sample(sizes: &[usize], seed: u64, datasets: u64) -> NullReference {
        let model = super::large_sample::LargeSampleModel::new(sizes);
        NullReference { datasets, stats: model.simulate(seed, datasets), method: NullMethod::LargeSample }
    }

    /// Simulates R = `datasets` normal datasets with cell sizes `sizes`. Dataset b uses
    /// the stream (seed, Auxiliary, term 0, chunk ⌊b/256⌋, aux [`AUX_DIAGNOSTICS`]),
    /// cells drawn in cell order.
    pub fn simulate(sizes: &[usize], seed: u64, datasets: u64) -> NullReference {
        let n_total: usize = sizes.iter().sum();
        let chunks = par_chunks(0, datasets, |task| {
            let mut stream = task.stream(seed, Purpose::Auxiliary, 0, AUX_DIAGNOSTICS);
            let mut data = vec![0.0; n_total];
            let mut buf = Buffers::default();
            let mut out = Vec::with_capacity((task.hi - task.lo) as usize);
            for b in task.first..task.hi {
                fill_normal(&mut stream, &mut data);
                if b < task.lo {
                    continue;
                }
                let mut start = 0;
                let cells = sizes.iter().map(|&n| {
                    let c = &data[start..start + n];
                    start += n;
                    c
                });
                out.push(dataset_stats(cells, &mut buf));
            }
            out
        });
        NullReference { datasets, stats: chunks.into_iter().flatten().collect(), method: NullMethod::Simulation }
    }

    /// Monte Carlo p-value of a large observed value: (1 + #{simulated ≥ observed})/(R + 1).
    /// Simulated values that are undefined (NaN) count as not exceeding. `None` when the
    /// observed value is NaN.
    pub fn p_upper(&self, observed: f64, stat: impl Fn(&DatasetStats) -> f64) -> Option<f64> {
        if observed.is_nan() {
            return None;
        }
        let ge = self.stats.iter().filter(|s| stat(s) >= observed).count();
        Some((1 + ge) as f64 / (self.datasets + 1) as f64)
    }

    /// Share of simulated datasets on which `pred` holds (the null firing rate of a rule).
    pub fn rate(&self, pred: impl Fn(&DatasetStats) -> bool) -> f64 {
        self.stats.iter().filter(|s| pred(s)).count() as f64 / self.stats.len().max(1) as f64
    }

    /// Mean of a count over the simulated datasets (its null expectation).
    pub fn mean(&self, stat: impl Fn(&DatasetStats) -> f64) -> f64 {
        let v: Vec<f64> = self.stats.iter().map(stat).filter(|x| !x.is_nan()).collect();
        crate::model::mean_two_pass(&v)
    }

    /// Median of a statistic over the simulated datasets (undefined values left out).
    pub fn median(&self, stat: impl Fn(&DatasetStats) -> f64) -> f64 {
        let mut v: Vec<f64> = self.stats.iter().map(stat).filter(|x| !x.is_nan()).collect();
        v.sort_unstable_by(f64::total_cmp);
        crate::summary::median_sorted(&v)
    }

    /// The cut-off on the smallest MAD tail level for the calibrated drop rule: the k-th
    /// smallest simulated value, k = ⌊[`DROP_LEVEL`]·(R + 1)⌋. A point whose tail level is
    /// strictly below it is removed; by exchangeability a normal dataset loses a point
    /// with probability at most k/(R + 1).
    pub fn mad_drop_threshold(&self) -> f64 {
        self.mad_tail_threshold(DROP_LEVEL)
    }

    /// The k-th smallest simulated smallest-MAD-tail level, k = round(level·(R + 1)):
    /// points strictly below it are beyond what normal data with these cell sizes give
    /// in all but a share `level` of datasets.
    pub fn mad_tail_threshold(&self, level: f64) -> f64 {
        let mut v: Vec<f64> = self.stats.iter().map(|s| s.min_mad_tail).collect();
        v.sort_unstable_by(f64::total_cmp);
        let k = ((level * (self.datasets + 1) as f64).round() as usize).clamp(1, v.len().max(1));
        v.get(k - 1).copied().unwrap_or(0.0)
    }

    /// Monte Carlo p-value of a small observed value: (1 + #{simulated ≤ observed})/(R + 1).
    /// `None` when the observed value is NaN.
    pub fn p_lower(&self, observed: f64, stat: impl Fn(&DatasetStats) -> f64) -> Option<f64> {
        if observed.is_nan() {
            return None;
        }
        let le = self.stats.iter().filter(|s| stat(s) <= observed).count();
        Some((1 + le) as f64 / (self.datasets + 1) as f64)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::resample::StreamKey;

    #[test]
    fn normal_variates_have_unit_moments() {
        let mut s = Stream::new(1, StreamKey { purpose: Purpose::Auxiliary, term: 0, chunk: 0, aux: 9 });
        let mut x = vec![0.0; 200_000];
        fill_normal(&mut s, &mut x);
        let m = crate::model::mean_two_pass(&x);
        let v = crate::summary::variance(&x);
        // Standard errors: mean 1/√N ≈ 0.0022, variance √(2/N) ≈ 0.0032; allow 5 SE.
        assert!(m.abs() < 0.012, "mean {m}");
        assert!((v - 1.0).abs() < 0.016, "variance {v}");
        let k = crate::summary::excess_kurtosis(&x).unwrap();
        assert!(k.abs() < 0.06, "excess kurtosis {k}"); // SE √(24/N) ≈ 0.011
    }

    #[test]
    fn pooled_moments_match_the_summary_functions() {
        let cells = [vec![1.0, 2.0, 4.0, 8.0], vec![3.0, 3.5, 9.0], vec![0.5, 0.7]];
        let mut buf = Buffers::default();
        let s = dataset_stats(cells.iter().map(|c| c.as_slice()), &mut buf);
        let resid: Vec<f64> = cells
            .iter()
            .flat_map(|c| {
                let m = crate::model::mean_two_pass(c);
                c.iter().map(move |v| v - m)
            })
            .collect();
        assert!((s.residual_g1 - crate::summary::skewness(&resid).unwrap()).abs() < 1e-12);
        assert!((s.residual_g2 - crate::summary::excess_kurtosis(&resid).unwrap()).abs() < 1e-12);
    }

    #[test]
    fn statistics_from_screens_match_the_screening_pass() {
        let cells = [vec![1.0, 9.0, 4.0, 8.0, 2.5, 30.0], vec![3.0, 3.5, 9.0, -4.0], vec![0.5, 0.7, 0.6]];
        let mut buf = Buffers::default();
        let a = dataset_stats(cells.iter().map(|c| c.as_slice()), &mut buf);
        let views: Vec<&[f64]> = cells.iter().map(|c| c.as_slice()).collect();
        let counts: Vec<ScreenCounts> = cells
            .iter()
            .map(|c| {
                let sorted = crate::summary::sorted(c);
                let from_screen = crate::diagnostics::outliers::screen(c).counts(&sorted);
                assert_eq!(from_screen, crate::diagnostics::outliers::screen_sorted(&sorted));
                from_screen
            })
            .collect();
        assert_eq!(a, dataset_stats_from_counts(&views, &counts));
        assert!(a.outside >= 1 && a.mad >= 1, "{a:?}");
    }

    #[test]
    fn simulation_does_not_depend_on_threads() {
        let run = |threads| {
            let pool = rayon::ThreadPoolBuilder::new().num_threads(threads).build().unwrap();
            pool.install(|| NullReference::simulate(&[5, 7, 6, 8], 11, 600))
        };
        let (a, b, c) = (run(1), run(2), run(8));
        assert_eq!(a.stats, b.stats);
        assert_eq!(a.stats, c.stats);
        assert_eq!(a.stats.len(), 600);
    }
}
