//! Permutation tests of every term on shared rearrangements of the observations
//! (METHODS §3.3–3.4 and §10.3), for any statistic an engine supplies.
//!
//! A permutation engine turns its data into one record per observation in canonical
//! order (a value, or a value with its cell) and says, through [`ArrangedStatistic`],
//! how to compute each term's statistic from the records rearranged over the cells.
//! This module does the rest, identically for every engine:
//!
//! * **Counting** the distinct rearrangements M = N!/∏ n_c! in u128 with an early stop
//!   ([`distinct_rearrangements`]); when M ≤ B it **enumerates** them all
//!   ([`enumerate_arrangements`]) and the p-value is exact.
//! * Otherwise it draws **random permutations** from the stream keyed
//!   (seed, [`Purpose::Permutation`], term 0, chunk): every term and both permutation
//!   engines see the same permutations. Resample b is chunk ⌊b/256⌋'s (b mod 256)-th
//!   Fisher–Yates pass, each pass starting from canonical order (METHODS §10.3). Chunks
//!   run in parallel with per-chunk buffers; nothing is allocated per resample.
//! * **Extending** a term whose Monte Carlo interval contains α: more resamples of the
//!   same stream (so the extended run is a prefix-consistent continuation), up to the
//!   maximum; if the extended count reaches M, the term is enumerated exactly instead.
//!
//! It never knows what the statistic is: the engines own that.

use super::mc::{self, McCount};
use super::progress::Progress;
use super::{par_chunks, ChunkTask, Purpose};
use crate::results::{finite, Decision, MonteCarlo, NULL_QUANTILE_POINTS};

/// Most resampled statistics kept per term for the null distribution and the tail
/// approximation (8 MB per term); counts and p-values always use every resample.
pub const STORED_STATISTICS_MAX: usize = 1 << 20;

/// Stream term code of every permutation: 0, shared by all terms and by both
/// permutation engines (METHODS §10.2).
pub const SHARED_TERM: u64 = 0;

/// The number of distinct assignments of N observations to cells of sizes `sizes`,
/// M = N!/∏_c n_c! = ∏_c binom(remaining, n_c) (METHODS §3.4), when it is at most
/// `limit`; `None` when it is larger.
///
/// Computed in u128 as a running product of binomial factors with k = min(n_c,
/// remaining − n_c), whose partial products never decrease, so it stops as soon as
/// `limit` is passed and never overflows.
pub fn distinct_rearrangements(sizes: &[usize], limit: u64) -> Option<u64> {
    let mut remaining: u128 = sizes.iter().map(|&n| n as u128).sum();
    let mut m: u128 = 1;
    for &n in sizes {
        let n = n as u128;
        let k = n.min(remaining - n);
        for i in 0..k {
            m = m * (remaining - i) / (i + 1);
            if m > limit as u128 {
                return None;
            }
        }
        remaining -= n;
    }
    Some(m as u64)
}

/// Calls `visit` with every distinct assignment of the records to the cells, each
/// exactly once, in nested lexicographic order: cell 1's members are a k-subset of all
/// N (lexicographic), cell 2's a subset of the rest, and so on (METHODS §3.4). The
/// slice passed holds the chosen records cell after cell (cell c in its canonical
/// range), each cell's members in canonical order; the first assignment is the
/// observed one.
pub fn enumerate_arrangements<R: Copy>(canonical: &[R], sizes: &[usize], mut visit: impl FnMut(&[R])) {
    if sizes.is_empty() {
        return;
    }
    let n = canonical.len();
    let mut starts = Vec::with_capacity(sizes.len());
    let mut at = 0;
    for &s in sizes {
        starts.push(at);
        at += s;
    }
    let mut pools: Vec<Vec<u32>> = (0..sizes.len()).map(|_| Vec::with_capacity(n)).collect();
    pools[0].extend(0..n as u32);
    let mut combs: Vec<Vec<usize>> = sizes.iter().map(|&s| Vec::with_capacity(s)).collect();
    let mut work = canonical.to_vec();
    enumerate_level(canonical, sizes, &starts, &mut pools, &mut combs, &mut work, &mut visit);
}

fn enumerate_level<R: Copy>(
    canonical: &[R],
    sizes: &[usize],
    starts: &[usize],
    pools: &mut [Vec<u32>],
    combs: &mut [Vec<usize>],
    work: &mut [R],
    visit: &mut impl FnMut(&[R]),
) {
    let (pool, deeper) = pools.split_first_mut().expect("one pool per cell");
    if sizes.len() == 1 {
        for (j, &idx) in pool.iter().enumerate() {
            work[starts[0] + j] = canonical[idx as usize];
        }
        visit(work);
        return;
    }
    let (comb, deeper_combs) = combs.split_first_mut().expect("one combination per cell");
    let (k, m) = (sizes[0], pool.len());
    comb.clear();
    comb.extend(0..k);
    loop {
        for (j, &p) in comb.iter().enumerate() {
            work[starts[0] + j] = canonical[pool[p] as usize];
        }
        let next = &mut deeper[0];
        next.clear();
        let mut chosen = 0;
        for (p, &idx) in pool.iter().enumerate() {
            if chosen < k && comb[chosen] == p {
                chosen += 1;
            } else {
                next.push(idx);
            }
        }
        enumerate_level(canonical, &sizes[1..], &starts[1..], deeper, deeper_combs, work, visit);
        // Next k-subset of 0..m in lexicographic order.
        let Some(i) = (0..k).rev().find(|&i| comb[i] < m - k + i) else {
            break;
        };
        comb[i] += 1;
        for j in i + 1..k {
            comb[j] = comb[j - 1] + 1;
        }
    }
}

/// Draws the permutations of chunk `task` from the shared permutation stream and calls
/// `visit(b, arranged)` for every wanted resample b in `task.lo..task.hi`, where
/// `arranged[i] = canonical[a[i]]` for the Fisher–Yates permutation a of that resample
/// (METHODS §10.3: a starts as the identity; for k = N−1 down to 1, j = bounded(k + 1),
/// swap `a[k]`, `a[j]`). Resamples before `task.lo` are drawn but not arranged, so every
/// later one is the same whatever the range asked for. `work` must have the length of
/// `canonical`; it is the chunk's buffer.
pub fn permuted_chunk<R: Copy>(
    task: ChunkTask,
    seed: u64,
    canonical: &[R],
    work: &mut [R],
    mut visit: impl FnMut(u64, &[R]),
) {
    let mut stream = task.stream(seed, Purpose::Permutation, SHARED_TERM, 0);
    for b in task.first..task.hi {
        if b < task.lo {
            for k in (1..canonical.len()).rev() {
                stream.bounded(k as u64 + 1);
            }
            continue;
        }
        work.copy_from_slice(canonical);
        stream.shuffle(work);
        visit(b, work);
    }
}

/// A statistic that a permutation engine computes for its terms from rearranged records.
pub trait ArrangedStatistic<R>: Sync {
    /// Per-chunk work space (cell sums and the like), so no resample allocates.
    type Scratch: Send;

    /// Fresh work space.
    fn scratch(&self) -> Self::Scratch;

    /// Writes the statistic of each term in `active` (term indices) for the records
    /// `arranged` (cell c in its canonical range) into `out[j]`; NaN when the
    /// statistic is undefined for this rearrangement (it then counts as an exceedance
    /// and as degenerate), +∞ when it is infinite.
    fn evaluate(&self, arranged: &[R], active: &[usize], scratch: &mut Self::Scratch, out: &mut [f64]);
}

/// How many resamples to draw and when to extend.
#[derive(Debug, Clone, Copy)]
pub struct Plan {
    /// Random permutations B (`--permutations`); also the enumeration limit B_enum.
    pub resamples: u64,
    /// Upper limit when a term is extended (`--max-permutations`).
    pub max_resamples: u64,
    /// Significance level whose position in the Monte Carlo interval triggers extension.
    pub alpha: f64,
    /// Seed of the permutation stream.
    pub seed: u64,
}

/// The permutation test of one term.
#[derive(Debug, Clone)]
pub struct TermOutcome {
    /// Resamples drawn B, or rearrangements enumerated M when `exact`.
    pub resamples: u64,
    /// Resampled statistics at least the observed one (METHODS §3.3 tie rule),
    /// degenerate ones included.
    pub exceedances: u64,
    /// Every distinct rearrangement was enumerated.
    pub exact: bool,
    /// Resamples whose statistic was undefined (counted as exceedances).
    pub degenerate: u64,
    /// The resampled statistics in resample order (NaN for degenerate ones), the first
    /// [`STORED_STATISTICS_MAX`] of them.
    pub statistics: Vec<f64>,
    /// Resamples first planned, when the term was extended beyond them.
    pub extended_from: Option<u64>,
}

impl TermOutcome {
    fn new() -> TermOutcome {
        TermOutcome {
            resamples: 0,
            exceedances: 0,
            exact: false,
            degenerate: 0,
            statistics: Vec::new(),
            extended_from: None,
        }
    }

    fn record(&mut self, statistic: f64, observed: f64) {
        if statistic.is_nan() {
            self.degenerate += 1;
            self.exceedances += 1;
        } else if mc::exceeds(statistic, observed) {
            self.exceedances += 1;
        }
        if self.statistics.len() < STORED_STATISTICS_MAX {
            self.statistics.push(statistic);
        }
        self.resamples += 1;
    }

    /// The Monte Carlo counts (B, b).
    pub fn count(&self) -> McCount {
        McCount { resamples: self.resamples, exceedances: self.exceedances }
    }

    /// Exact: b/M (the observed rearrangement is among the M); else (1 + b)/(1 + B)
    /// (Phipson & Smyth 2010).
    pub fn p(&self) -> f64 {
        if self.exact {
            self.exceedances as f64 / self.resamples as f64
        } else {
            self.count().p()
        }
    }

    /// Exact: reject when p < α; Monte Carlo: `undetermined` when α lies inside the 99%
    /// Clopper–Pearson interval, else reject when p < α.
    pub fn decision(&self, alpha: f64) -> Decision {
        if self.exact {
            Decision::from_p(self.p(), alpha)
        } else {
            self.count().decision(alpha)
        }
    }

    /// The `mc` block: exact runs have zero Monte Carlo error and the interval [p, p].
    pub fn monte_carlo(&self, scheme: &str, scheme_exact: Option<bool>) -> MonteCarlo {
        let mut m = self.count().to_result(scheme);
        if self.exact {
            let p = self.p();
            m.se = 0.0;
            m.ci_low = p;
            m.ci_high = p;
            m.exact = true;
        }
        m.scheme_exact = scheme_exact;
        m
    }

    /// Plain-language notes: extension, an undetermined decision, degenerate
    /// rearrangements (`max` is `--max-permutations`).
    pub fn notes(&self, alpha: f64, max: u64) -> Vec<String> {
        let mut notes = Vec::new();
        if let Some(from) = self.extended_from {
            if self.exact {
                notes.push(format!(
                    "p was near α with {from} random permutations, so all {} distinct rearrangements were enumerated",
                    self.resamples
                ));
            } else {
                notes.push(format!(
                    "p was near α with {from} permutations: extended to {} on the same stream",
                    self.resamples
                ));
            }
        }
        if !self.exact && self.decision(alpha) == Decision::Undetermined {
            notes.push(format!(
                "α = {alpha} lies inside the 99% Monte Carlo interval of p after {} permutations (limit --max-permutations {max}): undetermined",
                self.resamples
            ));
        }
        if self.degenerate > 0 {
            notes.push(format!(
                "{} rearrangement(s) left a cell without variance; they count as at least as extreme as observed",
                self.degenerate
            ));
        }
        notes
    }

    /// The resampled statistics thinned to at most [`NULL_QUANTILE_POINTS`] type-7
    /// quantiles at probabilities i/(K − 1); degenerate (NaN) statistics are left out,
    /// infinite ones become `None`.
    pub fn quantiles(&self) -> Vec<Option<f64>> {
        let mut sorted: Vec<f64> = self.statistics.iter().copied().filter(|x| !x.is_nan()).collect();
        sorted.sort_by(f64::total_cmp);
        thin_sorted(&sorted, NULL_QUANTILE_POINTS)
    }
}

/// At most `points` type-7 quantiles of sorted values at probabilities i/(K − 1), K =
/// min(len, points); all values when there are no more than `points`.
pub fn thin_sorted(sorted: &[f64], points: usize) -> Vec<Option<f64>> {
    let k = sorted.len().min(points);
    match k {
        0 => Vec::new(),
        1 => vec![finite(sorted[0])],
        _ if k == sorted.len() => sorted.iter().map(|&x| finite(x)).collect(),
        _ => (0..k)
            .map(|i| {
                let p = i as f64 / (k - 1) as f64;
                let h = (sorted.len() - 1) as f64 * p;
                let lo = h.floor() as usize;
                let hi = (lo + 1).min(sorted.len() - 1);
                let x = if sorted[lo] == sorted[hi] {
                    sorted[lo]
                } else {
                    sorted[lo] + (h - lo as f64) * (sorted[hi] - sorted[lo])
                };
                finite(x)
            })
            .collect(),
    }
}

/// Tests every term whose `observed` statistic exists, on shared rearrangements of
/// `canonical` (cells of sizes `sizes`, in canonical order): exact enumeration when
/// M ≤ B, else B random permutations, extended for terms whose interval contains α.
/// Returns one outcome per term (`None` where `observed` is `None`).
pub fn test_terms<R, S>(
    stat: &S,
    canonical: &[R],
    sizes: &[usize],
    observed: &[Option<f64>],
    plan: &Plan,
    progress: &Progress,
) -> Vec<Option<TermOutcome>>
where
    R: Copy + Send + Sync,
    S: ArrangedStatistic<R>,
{
    let mut outcomes: Vec<Option<TermOutcome>> = vec![None; observed.len()];
    let testable: Vec<usize> = (0..observed.len()).filter(|&t| observed[t].is_some()).collect();
    if testable.is_empty() || plan.resamples == 0 {
        return outcomes;
    }
    let max = plan.max_resamples.max(plan.resamples);
    let m = distinct_rearrangements(sizes, max);
    if let Some(m) = m.filter(|&m| m <= plan.resamples) {
        enumerate_terms(stat, canonical, sizes, observed, &testable, &mut outcomes);
        progress.advance(m);
        return outcomes;
    }
    for &t in &testable {
        outcomes[t] = Some(TermOutcome::new());
    }
    let mut active = testable;
    let (mut done, mut target) = (0, plan.resamples);
    loop {
        draw_terms(stat, canonical, observed, &active, done, target, plan.seed, progress, &mut outcomes);
        done = target;
        let ambiguous: Vec<usize> = active
            .iter()
            .copied()
            .filter(|&t| outcomes[t].as_ref().is_some_and(|o| o.count().ambiguous(plan.alpha)))
            .collect();
        if ambiguous.is_empty() {
            break;
        }
        let Some(next) = mc::next_resamples(done, max) else {
            break;
        };
        if let Some(m) = m.filter(|&m| m <= next) {
            enumerate_terms(stat, canonical, sizes, observed, &ambiguous, &mut outcomes);
            for &t in &ambiguous {
                if let Some(o) = outcomes[t].as_mut() {
                    o.extended_from = Some(plan.resamples);
                }
            }
            progress.advance(m);
            break;
        }
        progress.extend(next - done);
        for &t in &ambiguous {
            if let Some(o) = outcomes[t].as_mut() {
                o.extended_from = Some(plan.resamples);
            }
        }
        active = ambiguous;
        target = next;
    }
    outcomes
}

fn enumerate_terms<R, S>(
    stat: &S,
    canonical: &[R],
    sizes: &[usize],
    observed: &[Option<f64>],
    terms: &[usize],
    outcomes: &mut [Option<TermOutcome>],
) where
    R: Copy,
    S: ArrangedStatistic<R>,
{
    let mut fresh: Vec<TermOutcome> = terms.iter().map(|_| TermOutcome { exact: true, ..TermOutcome::new() }).collect();
    let mut scratch = stat.scratch();
    let mut out = vec![0.0; terms.len()];
    enumerate_arrangements(canonical, sizes, |arranged| {
        stat.evaluate(arranged, terms, &mut scratch, &mut out);
        for (j, &t) in terms.iter().enumerate() {
            fresh[j].record(out[j], observed[t].unwrap_or(f64::INFINITY));
        }
    });
    for (o, &t) in fresh.into_iter().zip(terms) {
        outcomes[t] = Some(o);
    }
}

#[allow(clippy::too_many_arguments)]
fn draw_terms<R, S>(
    stat: &S,
    canonical: &[R],
    observed: &[Option<f64>],
    active: &[usize],
    start: u64,
    end: u64,
    seed: u64,
    progress: &Progress,
    outcomes: &mut [Option<TermOutcome>],
) where
    R: Copy + Send + Sync,
    S: ArrangedStatistic<R>,
{
    let width = active.len();
    let chunks = par_chunks(start, end, |task| {
        let mut work = canonical.to_vec();
        let mut scratch = stat.scratch();
        let mut values = vec![0.0; (task.hi - task.lo) as usize * width];
        let mut rows = values.chunks_exact_mut(width);
        permuted_chunk(task, seed, canonical, &mut work, |_, arranged| {
            if let Some(row) = rows.next() {
                stat.evaluate(arranged, active, &mut scratch, row);
            }
        });
        progress.advance(task.hi - task.lo);
        values
    });
    // Sequential reduction in resample order (METHODS §10.3).
    for values in chunks {
        for row in values.chunks_exact(width) {
            for (j, &t) in active.iter().enumerate() {
                if let (Some(o), Some(obs)) = (outcomes[t].as_mut(), observed[t]) {
                    o.record(row[j], obs);
                }
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::resample::progress::Visibility;
    use crate::resample::Stream;
    use crate::resample::StreamKey;

    fn factorial(n: u128) -> u128 {
        (1..=n).product()
    }

    #[test]
    fn rearrangement_counts_are_multinomials_with_early_stop() {
        // M = N!/∏ n_c! (METHODS §3.4: 2×2 with n = 2 gives 8!/2⁴ = 2520).
        assert_eq!(distinct_rearrangements(&[2, 2, 2, 2], 10_000), Some(2520));
        assert_eq!(distinct_rearrangements(&[2, 2, 2, 2], 2519), None);
        assert_eq!(distinct_rearrangements(&[3, 4, 5], u64::MAX), Some((factorial(12) / (6 * 24 * 120)) as u64));
        assert_eq!(distinct_rearrangements(&[7], 1), Some(1));
        // Huge designs stop early instead of overflowing.
        assert_eq!(distinct_rearrangements(&[500, 500, 500], 99_999), None);
        assert_eq!(distinct_rearrangements(&[1; 20], u64::MAX), Some(factorial(20) as u64));
    }

    #[test]
    fn enumeration_visits_every_assignment_once() {
        let sizes = [2, 1, 2];
        let canonical: Vec<u32> = (0..5).collect();
        let mut seen = std::collections::BTreeSet::new();
        let mut first = None;
        enumerate_arrangements(&canonical, &sizes, |a| {
            first.get_or_insert_with(|| a.to_vec());
            // Each cell's members in canonical order; a permutation of 0..5.
            assert!(a[0] < a[1] && a[3] < a[4]);
            let mut s = a.to_vec();
            s.sort();
            assert_eq!(s, canonical);
            assert!(seen.insert(a.to_vec()), "repeated {a:?}");
        });
        assert_eq!(seen.len() as u64, distinct_rearrangements(&sizes, u64::MAX).unwrap());
        assert_eq!(first.unwrap(), canonical, "the observed assignment comes first");
    }

    #[test]
    fn first_permutation_is_fisher_yates_on_the_shared_stream() {
        // METHODS §10.3: resample 0 is Fisher–Yates of the identity with key (1, 0, 0, 0)
        // (term code 0 = shared). stream.rs checks the algorithm against the METHODS
        // vectors (implementation (a)); here the key and the starting order are checked.
        let canonical: Vec<u32> = (0..10).collect();
        let mut work = canonical.clone();
        let task = crate::resample::chunk_tasks(0, 1)[0];
        let mut got = Vec::new();
        permuted_chunk(task, 42, &canonical, &mut work, |_, a| got = a.to_vec());
        let mut s = Stream::new(42, StreamKey { purpose: Purpose::Permutation, term: 0, chunk: 0, aux: 0 });
        let mut want = canonical.clone();
        for k in (1..10u64).rev() {
            let j = s.bounded(k + 1) as usize;
            want.swap(k as usize, j);
        }
        assert_eq!(got, want);
    }

    #[test]
    fn skipped_resamples_consume_the_same_draws() {
        // Drawing 0..300 and keeping 100..300 equals drawing 100..300 directly.
        let canonical: Vec<u32> = (0..37).collect();
        let collect = |lo: u64, hi: u64| {
            let mut out = Vec::new();
            for task in crate::resample::chunk_tasks(lo, hi) {
                let mut work = canonical.clone();
                permuted_chunk(task, 9, &canonical, &mut work, |b, a| out.push((b, a.to_vec())));
            }
            out
        };
        let all = collect(0, 300);
        assert_eq!(collect(100, 300), all[100..].to_vec());
        // Each pass starts from canonical order: resample 1 is a fresh shuffle of the identity.
        let mut s = Stream::new(9, StreamKey { purpose: Purpose::Permutation, term: 0, chunk: 0, aux: 0 });
        let mut a = canonical.clone();
        s.shuffle(&mut a);
        let mut b = canonical.clone();
        s.shuffle(&mut b);
        assert_eq!(all[1].1, b);
    }

    /// Sum of the first cell: a toy statistic with a known exact distribution.
    struct FirstCellSum(usize);
    impl ArrangedStatistic<f64> for FirstCellSum {
        type Scratch = ();
        fn scratch(&self) {}
        fn evaluate(&self, arranged: &[f64], active: &[usize], _: &mut (), out: &mut [f64]) {
            let s: f64 = arranged[..self.0].iter().sum();
            for (o, _) in out.iter_mut().zip(active) {
                *o = s;
            }
        }
    }

    #[test]
    fn exact_p_of_a_two_sample_sum() {
        // Two samples of 3 from 1..6: first-sample sums ≥ 14 are {4,5,6} = 15 and
        // {3,5,6} = 14 ({3,4,6} = 13 is the next), so 2 of C(6,3) = 20 (by hand).
        let canonical = [4.0, 5.0, 6.0, 1.0, 2.0, 3.0];
        let plan = Plan { resamples: 100, max_resamples: 100, alpha: 0.05, seed: 1 };
        let progress = Progress::new("t", 0, Visibility::Hidden);
        let out = test_terms(&FirstCellSum(3), &canonical, &[3, 3], &[Some(14.0)], &plan, &progress);
        let o = out[0].as_ref().unwrap();
        assert!(o.exact);
        assert_eq!((o.exceedances, o.resamples), (2, 20));
        assert_eq!(o.p(), 0.1);
        assert_eq!(o.monte_carlo("x", None).se, 0.0);
    }

    #[test]
    fn monte_carlo_runs_extend_only_ambiguous_terms_and_stay_prefix_consistent() {
        // 40 observations in two cells: M = C(40, 20) is far above B.
        let canonical: Vec<f64> = (0..40).map(|i| ((i * 37) % 40) as f64).collect();
        let progress = Progress::new("t", 0, Visibility::Hidden);
        let total: f64 = canonical.iter().sum();
        // Term 0: observed at the median of the null (p ≈ 0.5, decided at once);
        // term 1: observed near the 5% point (ambiguous at B = 199, extended).
        let mut null: Vec<f64> = Vec::new();
        let probe = Plan { resamples: 20_000, max_resamples: 20_000, alpha: 0.05, seed: 3 };
        let o = test_terms(&FirstCellSum(20), &canonical, &[20, 20], &[Some(0.0)], &probe, &progress);
        null.extend(&o[0].as_ref().unwrap().statistics);
        null.sort_by(f64::total_cmp);
        let q95 = null[(0.95 * null.len() as f64) as usize];
        let plan = Plan { resamples: 199, max_resamples: 5000, alpha: 0.05, seed: 3 };
        let out =
            test_terms(&FirstCellSum(20), &canonical, &[20, 20], &[Some(total / 2.0), Some(q95)], &plan, &progress);
        let (a, b) = (out[0].as_ref().unwrap(), out[1].as_ref().unwrap());
        assert_eq!(a.resamples, 199);
        assert!(a.extended_from.is_none());
        assert!(b.resamples > 199 && b.extended_from == Some(199), "{}", b.resamples);
        // The extended term's first 199 statistics are the unextended ones, and both
        // terms saw the same permutations.
        assert_eq!(a.statistics[..], b.statistics[..199]);
        assert_eq!(b.statistics[..], o[0].as_ref().unwrap().statistics[..b.statistics.len()]);
    }

    #[test]
    fn thinning_keeps_ends_and_order() {
        let v: Vec<f64> = (0..5000).map(|i| i as f64).collect();
        let q = thin_sorted(&v, 1001);
        assert_eq!(q.len(), 1001);
        assert_eq!(q[0], Some(0.0));
        assert_eq!(q[1000], Some(4999.0));
        assert_eq!(q[500], Some(2499.5));
        assert_eq!(thin_sorted(&[1.0, f64::INFINITY], 1001), vec![Some(1.0), None]);
        assert!(thin_sorted(&[], 10).is_empty());
    }
}
