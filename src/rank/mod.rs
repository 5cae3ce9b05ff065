//! Ranks for the rank-based engines: mid-ranks, pseudo-ranks, tie summaries, the
//! alignment of the aligned rank transform ([`align`]) and ART-C contrasts ([`artc`]).
//!
//! Every ranking here is one function, [`weighted_mid_ranks`]: sort once, walk the tie
//! groups, and give each observation ½ + (weight strictly below it) + ½(weight tied with
//! it). Unit weights give the ordinary mid-ranks of scipy `rankdata(method="average")`
//! (METHODS §0); weights N/(C·n_c) give the pseudo-ranks of Brunner, Konietschke, Pauly &
//! Puri (2017). Sharing the walk keeps the two definitions from drifting apart, and in a
//! balanced design the weights are exactly 1, so the pseudo-ranks *are* the mid-ranks,
//! bit for bit.
//!
//! Values computed by quorum (aligned responses) carry rounding error, so two values that
//! are equal in exact arithmetic can differ in the last bits; their ranking accepts a
//! tie tolerance ([`TieRule`]). Raw data are ranked with exact equality.

pub mod align;
pub mod artc;

/// When two values count as tied.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum TieRule {
    /// Only exactly equal values are tied (raw data; scipy's convention).
    Exact,
    /// Values are tied when a chain of neighbours in sorted order are at most this far
    /// apart (absolute). For computed values whose exact ties the rounding has broken.
    Within(f64),
}

/// Ranks ½ + W_below + ½·W_tied, where W_below is the total weight of observations
/// strictly smaller and W_tied the total weight of the observation's tie group
/// (including itself).
///
/// With unit weights this is the mid-rank (1-based, ties get the average of their
/// positions; scipy `rankdata(method="average")`). `weights[i]` must be positive.
/// Sums are accumulated in sorted order, so the result does not depend on threads.
pub fn weighted_mid_ranks(x: &[f64], weights: &[f64], ties: TieRule) -> Vec<f64> {
    debug_assert_eq!(x.len(), weights.len());
    let mut order: Vec<usize> = (0..x.len()).collect();
    order.sort_by(|&i, &j| x[i].total_cmp(&x[j]));
    let mut ranks = vec![0.0; x.len()];
    let mut below = 0.0;
    let mut start = 0;
    while start < order.len() {
        let mut end = start + 1;
        while end < order.len() && tied(x[order[end - 1]], x[order[end]], ties) {
            end += 1;
        }
        let group: f64 = order[start..end].iter().map(|&i| weights[i]).sum();
        let rank = 0.5 + below + 0.5 * group;
        for &i in &order[start..end] {
            ranks[i] = rank;
        }
        below += group;
        start = end;
    }
    ranks
}

fn tied(lo: f64, hi: f64, ties: TieRule) -> bool {
    match ties {
        TieRule::Exact => lo == hi,
        TieRule::Within(tol) => hi - lo <= tol,
    }
}

/// Mid-ranks (1-based, average of tied positions) of `x` over all its values, with
/// exact ties: scipy `rankdata(x, method="average")`.
pub fn mid_ranks(x: &[f64]) -> Vec<f64> {
    weighted_mid_ranks(x, &vec![1.0; x.len()], TieRule::Exact)
}

/// Pseudo-ranks (Brunner, Konietschke, Pauly & Puri 2017, JRSS-B 79:1463–1485, \[M\]):
/// ψ_i = ½ + N·(1/C)·Σ_{c'} F̂_{c'}(x_i), with the normalised empirical distribution
/// F̂_{c'}(t) = (#{x_{c'j} < t} + ½#{x_{c'j} = t})/n_{c'} (METHODS §6.1).
///
/// `x` is in canonical order (cells contiguous, sizes `cell_sizes`, all ≥ 1). Written
/// as a weighted mid-rank with weight N/(C·n_c) for every observation of cell c: those
/// weights are exactly 1 in a balanced design, where pseudo-ranks equal mid-ranks.
/// Unlike mid-ranks, pseudo-ranks estimate relative effects against the *unweighted*
/// mean of the cell distributions, so the quantities they estimate do not depend on
/// the cell sizes.
pub fn pseudo_ranks(x: &[f64], cell_sizes: &[usize]) -> Vec<f64> {
    let n_total: usize = cell_sizes.iter().sum();
    debug_assert_eq!(n_total, x.len());
    let c = cell_sizes.len() as f64;
    let mut weights = Vec::with_capacity(x.len());
    for &n in cell_sizes {
        let w = n_total as f64 / (c * n as f64);
        weights.extend(std::iter::repeat_n(w, n));
    }
    weighted_mid_ranks(x, &weights, TieRule::Exact)
}

/// How tied a set of values is.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TieSummary {
    /// Number of values.
    pub n: usize,
    /// Number of distinct values.
    pub distinct: usize,
    /// Observations that share their value with at least one other observation.
    pub tied_observations: usize,
    /// Σ (t³ − t) over tie groups of size t (Kruskal & Wallis 1952 tie correction).
    pub tie_sum: f64,
}

impl TieSummary {
    /// Share of observations that are tied with another, in [0, 1].
    pub fn tied_share(&self) -> f64 {
        if self.n == 0 {
            0.0
        } else {
            self.tied_observations as f64 / self.n as f64
        }
    }

    /// Share of the mid-rank variance lost to ties, Σ(t³ − t)/(N³ − N) (one minus the
    /// Kruskal–Wallis tie-correction factor); 0 without ties, 1 when all values are equal.
    pub fn variance_lost(&self) -> f64 {
        let n = self.n as f64;
        if self.n < 2 {
            0.0
        } else {
            self.tie_sum / (n * n * n - n)
        }
    }
}

/// Distinct values and tie groups of `x` (exact equality).
pub fn tie_summary(x: &[f64]) -> TieSummary {
    let mut s = x.to_vec();
    s.sort_by(f64::total_cmp);
    let mut distinct = 0;
    let mut tied_observations = 0;
    let mut tie_sum = 0.0;
    let mut start = 0;
    while start < s.len() {
        let mut end = start + 1;
        while end < s.len() && s[end] == s[start] {
            end += 1;
        }
        let t = (end - start) as f64;
        distinct += 1;
        if end - start > 1 {
            tied_observations += end - start;
            tie_sum += t * t * t - t;
        }
        start = end;
    }
    TieSummary { n: x.len(), distinct, tied_observations, tie_sum }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn mid_ranks_follow_the_average_convention() {
        // scipy.stats.rankdata([3, 1, 4, 1, 5, 9, 2, 6, 5], method="average")
        // = [4, 1.5, 5, 1.5, 6.5, 9, 3, 8, 6.5] (by hand: 1s share positions 1–2, 5s 6–7).
        let r = mid_ranks(&[3.0, 1.0, 4.0, 1.0, 5.0, 9.0, 2.0, 6.0, 5.0]);
        assert_eq!(r, vec![4.0, 1.5, 5.0, 1.5, 6.5, 9.0, 3.0, 8.0, 6.5]);
        assert!(mid_ranks(&[]).is_empty());
        assert_eq!(mid_ranks(&[2.0, 2.0, 2.0]), vec![2.0; 3]);
    }

    #[test]
    fn tolerance_joins_values_that_rounding_split() {
        let x = [0.1 + 0.2, 0.3, 1.0];
        assert_eq!(weighted_mid_ranks(&x, &[1.0; 3], TieRule::Exact), vec![2.0, 1.0, 3.0]);
        assert_eq!(weighted_mid_ranks(&x, &[1.0; 3], TieRule::Within(1e-12)), vec![1.5, 1.5, 3.0]);
    }

    #[test]
    fn pseudo_ranks_equal_mid_ranks_when_balanced_and_follow_the_definition_otherwise() {
        let x = [3.0, 1.0, 2.0, 2.0, 5.0, 1.0];
        assert_eq!(pseudo_ranks(&x, &[3, 3]), mid_ranks(&x));
        // Unbalanced: cells {3, 1} and {2, 2, 5, 1}; N = 6, C = 2. Straight from the
        // definition ψ = ½ + (N/C)·Σ_c F̂_c(x), by hand:
        // x = 3: F̂_1 = (1 + ½)/2 = 0.75, F̂_2 = 3/4 → ψ = ½ + 3·1.5 = 5.0
        // x = 1: F̂_1 = ½/2 = 0.25, F̂_2 = ½/4 = 0.125 → ψ = ½ + 3·0.375 = 1.625
        // x = 2: F̂_1 = 1/2, F̂_2 = (1 + 1)/4 = 0.5 → ψ = ½ + 3 = 3.5
        // x = 5: F̂_1 = 1, F̂_2 = (3 + ½)/4 = 0.875 → ψ = ½ + 3·1.875 = 6.125
        let p = pseudo_ranks(&x, &[2, 4]);
        let want = [5.0, 1.625, 3.5, 3.5, 6.125, 1.625];
        for (a, b) in p.iter().zip(want) {
            assert!((a - b).abs() < 1e-12, "{p:?}");
        }
    }

    #[test]
    fn tie_summary_counts_groups() {
        let t = tie_summary(&[1.0, 2.0, 2.0, 3.0, 3.0, 3.0, 4.0]);
        assert_eq!(t.distinct, 4);
        assert_eq!(t.tied_observations, 5);
        assert_eq!(t.tie_sum, 6.0 + 24.0);
        assert!((t.tied_share() - 5.0 / 7.0).abs() < 1e-15);
        assert!((t.variance_lost() - 30.0 / 336.0).abs() < 1e-15);
        assert_eq!(tie_summary(&[]).distinct, 0);
    }
}
