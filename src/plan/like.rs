//! Calibration on the user's own data (`--like`): resampling populations that keep each
//! cell's shape and spread but make each engine's null true.
//!
//! Each cell's residuals are taken about the estimand the engine tests and inflated by
//! √(n_c/(n_c − 1)), so that the resampling population has the cell's unbiased variance
//! (a residual has expected square (n_c − 1)/n_c·σ²_c):
//!
//! * `equal-means`: e_ci = (y_ci − ȳ_c)·√(n_c/(n_c − 1)); every cell's population mean is 0,
//!   so every means hypothesis (classical, hc, permutation, bootstrap) holds exactly;
//! * `equal-trimmed-means`: e_ci = (y_ci − T_γ(F̂_c))·√(n_c/(n_c − 1)), where T_γ(F̂_c) is the
//!   γ-trimmed mean of the cell's empirical distribution itself,
//!   T_γ(F̂) = (1/(1 − 2γ)) ∫_γ^{1−γ} F̂⁻¹(u) du = Σ_i w_i x_(i) with
//!   w_i = |[(i − 1)/n, i/n] ∩ [γ, 1 − γ]| / (1 − 2γ). (The sample trimmed mean with
//!   g = ⌊γn⌋ equals it only when γn is whole; centring at the population value makes the
//!   resampling population's trimmed mean exactly 0.)
//!
//! A cell with one observation has residual 0 and no inflation (the factor is undefined);
//! the simulated cell is then constant and engines that need a within-cell variance say
//! so, as they would on the data.

use crate::design::Design;
use crate::model::mean_two_pass;
use serde::{Deserialize, Serialize};

/// One cell of the data, for the plan's description (outcome units).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DataCell {
    /// Observations.
    pub n: usize,
    /// Mean.
    pub mean: f64,
    /// SD (n − 1 denominator); null for n = 1.
    pub sd: Option<f64>,
    /// Trimmed mean of the empirical distribution at the engines' γ (the centre of
    /// `equal-trimmed-means`).
    pub trimmed_centre: f64,
}

/// Resampling populations of every cell.
#[derive(Debug, Clone)]
pub struct LikePools {
    /// Inflated residuals about the cell means, cell order.
    pub about_means: Vec<Vec<f64>>,
    /// Inflated residuals about the cells' empirical trimmed means.
    pub about_trimmed: Vec<Vec<f64>>,
    /// Cell descriptions.
    pub cells: Vec<DataCell>,
    /// FNV-1a (64-bit) of the cell sizes and the outcome values in canonical order, so
    /// that shards of one plan are known to have read the same data.
    pub fingerprint: String,
}

/// γ-trimmed mean of the empirical distribution of `x` (module docs).
pub fn empirical_trimmed_mean(x: &[f64], gamma: f64) -> f64 {
    if gamma <= 0.0 {
        return mean_two_pass(x);
    }
    let mut s = x.to_vec();
    s.sort_by(f64::total_cmp);
    let n = s.len() as f64;
    let (lo, hi) = (gamma, 1.0 - gamma);
    let mut total = 0.0;
    for (i, v) in s.iter().enumerate() {
        let a = (i as f64 / n).max(lo);
        let b = ((i + 1) as f64 / n).min(hi);
        if b > a {
            total += (b - a) * v;
        }
    }
    total / (hi - lo)
}

impl LikePools {
    /// The populations of every cell of `design` with trimming proportion `gamma`.
    pub fn new(design: &Design, gamma: f64) -> LikePools {
        let loc = design.location();
        let mut about_means = Vec::new();
        let mut about_trimmed = Vec::new();
        let mut cells = Vec::new();
        for c in 0..design.n_cells() {
            let v = design.cell_values(c);
            let n = v.len();
            let inflate = if n > 1 { (n as f64 / (n as f64 - 1.0)).sqrt() } else { 1.0 };
            let mean = mean_two_pass(v);
            let centre = empirical_trimmed_mean(v, gamma);
            about_means.push(v.iter().map(|y| (y - mean) * inflate).collect());
            about_trimmed.push(v.iter().map(|y| (y - centre) * inflate).collect());
            let sd =
                (n > 1).then(|| (v.iter().map(|y| (y - mean) * (y - mean)).sum::<f64>() / (n as f64 - 1.0)).sqrt());
            cells.push(DataCell { n, mean: mean + loc, sd, trimmed_centre: centre + loc });
        }
        LikePools { about_means, about_trimmed, cells, fingerprint: fingerprint(design) }
    }
}

/// FNV-1a 64 over the cell sizes, the location and the centred outcome values (bits).
fn fingerprint(design: &Design) -> String {
    const OFFSET: u64 = 0xcbf2_9ce4_8422_2325;
    const PRIME: u64 = 0x0000_0100_0000_01b3;
    let mut h = OFFSET;
    let mut eat = |w: u64| {
        for b in w.to_le_bytes() {
            h ^= b as u64;
            h = h.wrapping_mul(PRIME);
        }
    };
    for n in design.cell_sizes() {
        eat(n as u64);
    }
    eat(design.location().to_bits());
    for y in design.y() {
        eat(y.to_bits());
    }
    format!("{h:016x}")
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::plan::scenario::factors_for;

    #[test]
    fn empirical_trimmed_mean_matches_the_integral() {
        // n = 10, γ = 0.2: γn whole, so it is the sample trimmed mean of the middle six.
        let x = [9.0, 1.0, 2.0, 3.0, 4.0, 5.0, 6.0, 7.0, 8.0, 100.0];
        assert!((empirical_trimmed_mean(&x, 0.2) - (3.0 + 4.0 + 5.0 + 6.0 + 7.0 + 8.0) / 6.0).abs() < 1e-12);
        // n = 4, γ = 0.2: weights (0.05, 0.25, 0.25, 0.05)/0.6 on the order statistics.
        let y = [0.0, 1.0, 2.0, 10.0];
        let want = (0.05 * 0.0 + 0.25 * 1.0 + 0.25 * 2.0 + 0.05 * 10.0) / 0.6;
        assert!((empirical_trimmed_mean(&y, 0.2) - want).abs() < 1e-12);
        assert_eq!(empirical_trimmed_mean(&y, 0.0), 3.25);
    }

    #[test]
    fn pools_are_centred_and_inflated() {
        let d = Design::from_cells("y", factors_for(&[2]), &[vec![1.0, 2.0, 6.0], vec![4.0, 4.0, 5.0, 11.0]]).unwrap();
        let p = LikePools::new(&d, 0.2);
        for (c, pool) in p.about_means.iter().enumerate() {
            assert!(pool.iter().sum::<f64>().abs() < 1e-12);
            let n = pool.len() as f64;
            // Population variance of the pool = the cell's unbiased variance.
            let var = pool.iter().map(|v| v * v).sum::<f64>() / n;
            let s = p.cells[c].sd.unwrap();
            assert!((var - s * s).abs() < 1e-12);
        }
        for pool in &p.about_trimmed {
            assert!(empirical_trimmed_mean(pool, 0.2).abs() < 1e-12);
        }
        assert_eq!(p.fingerprint.len(), 16);
    }
}
