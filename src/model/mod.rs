//! The factorial model: cell statistics, error and total sums of squares, sums of
//! squares of Types I–III, and effect sizes (METHODS §1).
//!
//! Everything here is computed from the design's cell sums and the quadratic forms of
//! [`crate::design::forms`]; the least-squares reference fit ([`ols`]) exists so that
//! tests can confirm the fast forms against a full refit.

pub mod ols;
pub mod wald;

use crate::design::forms::SsForms;
use crate::design::Design;

/// Per-cell and overall quantities of the full (saturated) factorial model.
#[derive(Debug, Clone)]
pub struct Fit {
    /// Cell sizes n_c.
    pub n: Vec<usize>,
    /// Cell means of the centred outcome (add the design's location for reported means).
    pub mean: Vec<f64>,
    /// Within-cell sums of squared deviations Σ_i (y_ci − ȳ_c)² (two-pass).
    pub ss_within: Vec<f64>,
    /// Grand mean of the centred outcome.
    pub grand_mean: f64,
    /// Cell sums of the outcome centred at the grand mean (input to the SS forms).
    pub centred_sums: Vec<f64>,
    /// Error sum of squares SSE = Σ_c Σ_i (y_ci − ȳ_c)².
    pub sse: f64,
    /// Error degrees of freedom N − C.
    pub df_error: usize,
    /// Total corrected sum of squares Σ (y − ȳ)².
    pub sst: f64,
    /// N.
    pub n_total: usize,
}

impl Fit {
    /// Fits the full factorial model (cell means) with two-pass sums for accuracy.
    pub fn new(design: &Design) -> Fit {
        let y = design.y();
        let n_total = y.len();
        let n = design.cell_sizes();
        // Each sum runs in its own fixed order, so spreading cells over threads (for a
        // large design) changes no digit.
        let cell = |c: usize| {
            let v = design.cell_values(c);
            let m = mean_two_pass(v);
            (m, v.iter().map(|x| (x - m) * (x - m)).sum::<f64>())
        };
        let whole = || {
            let g = mean_two_pass(y);
            (g, y.iter().map(|x| (x - g) * (x - g)).sum::<f64>())
        };
        let ((grand_mean, sst), per_cell): ((f64, f64), Vec<(f64, f64)>) = if n_total >= PARALLEL_FIT {
            use rayon::prelude::*;
            rayon::join(whole, || (0..n.len()).into_par_iter().map(cell).collect())
        } else {
            (whole(), (0..n.len()).map(cell).collect())
        };
        let (mean, ss_within): (Vec<f64>, Vec<f64>) = per_cell.into_iter().unzip();
        let centred_sum = |c: usize| design.cell_values(c).iter().map(|x| x - grand_mean).sum::<f64>();
        let centred_sums: Vec<f64> = if n_total >= PARALLEL_FIT {
            use rayon::prelude::*;
            (0..n.len()).into_par_iter().map(centred_sum).collect()
        } else {
            (0..n.len()).map(centred_sum).collect()
        };
        let sse = ss_within.iter().sum();
        Fit { df_error: n_total - n.len(), n, mean, ss_within, grand_mean, centred_sums, sse, sst, n_total }
    }

    /// Mean squared error SSE/(N − C); NaN without residual df.
    pub fn mse(&self) -> f64 {
        self.sse / self.df_error as f64
    }

    /// The sum of squares of every term under `forms`' SS type.
    pub fn term_ss(&self, forms: &SsForms) -> Vec<f64> {
        (0..forms.n_terms()).map(|t| forms.ss(t, &self.centred_sums).max(0.0)).collect()
    }
}

/// Observations from which [`Fit::new`] spreads its sums over the rayon pool.
const PARALLEL_FIT: usize = 1 << 16;

/// Mean with a correction pass (accurate for data with a large common offset).
pub fn mean_two_pass(v: &[f64]) -> f64 {
    if v.is_empty() {
        return f64::NAN;
    }
    let n = v.len() as f64;
    let m = v.iter().sum::<f64>() / n;
    m + v.iter().map(|x| x - m).sum::<f64>() / n
}

/// The effect sizes of one term (METHODS §1.4), from its SS and the model's error.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct EffectSizes {
    /// η² = SS_S / SST.
    pub eta_sq: f64,
    /// Partial η² = SS_S / (SS_S + SSE).
    pub partial_eta_sq: f64,
    /// ω² = (SS_S − df_S·MSE) / (SST + MSE); may be negative (reported raw).
    pub omega_sq: f64,
    /// Partial ω² = (SS_S − df_S·MSE) / (SS_S + (N − df_S)·MSE); may be negative.
    pub partial_omega_sq: f64,
    /// Generalized η² (Olejnik & Algina 2003), when some factor is measured.
    pub generalized_eta_sq: Option<f64>,
}

/// Effect sizes of every term.
///
/// `ss[t]` and `df[t]` are the terms' SS and df under one SS type; `measured[t]` says
/// whether term t contains a measured factor. Generalized η² is computed only when
/// some factor is measured (with none it equals partial η²; METHODS Overrides 4):
/// η²_G,S = SS_S / (δ_S·SS_S + Σ_{T∈𝓜} SS_T + SSE), δ_S = 0 if S ∈ 𝓜 else 1.
pub fn effect_sizes(ss: &[f64], df: &[usize], measured: &[bool], fit: &Fit) -> Vec<EffectSizes> {
    let mse = fit.mse();
    let any_measured = measured.iter().any(|&m| m);
    let measured_ss: f64 = ss.iter().zip(measured).filter(|(_, &m)| m).map(|(s, _)| s).sum();
    ss.iter()
        .zip(df)
        .zip(measured)
        .map(|((&s, &d), &m)| {
            let d = d as f64;
            EffectSizes {
                eta_sq: s / fit.sst,
                partial_eta_sq: s / (s + fit.sse),
                omega_sq: (s - d * mse) / (fit.sst + mse),
                partial_omega_sq: (s - d * mse) / (s + (fit.n_total as f64 - d) * mse),
                generalized_eta_sq: any_measured.then(|| s / (if m { 0.0 } else { s } + measured_ss + fit.sse)),
            }
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::design::Factor;

    #[test]
    fn a_large_fit_is_the_same_on_any_thread_count() {
        // Above PARALLEL_FIT, with a large common offset and unequal cells.
        let mut x: u64 = 0x2545_F491_4F6C_DD1D;
        let cells: Vec<Vec<f64>> = [30_000usize, 2, 25_000, 21_000]
            .iter()
            .map(|&n| {
                (0..n)
                    .map(|_| {
                        x ^= x << 13;
                        x ^= x >> 7;
                        x ^= x << 17;
                        1e6 + (x % 10_000) as f64 / 7.0
                    })
                    .collect()
            })
            .collect();
        let factor = |name: &str| Factor { name: name.into(), levels: vec!["1".into(), "2".into()], measured: false };
        let design = Design::from_cells("y", vec![factor("a"), factor("b")], &cells).unwrap();
        assert!(design.n_obs() >= PARALLEL_FIT);
        let bits = |threads: usize| {
            let pool = rayon::ThreadPoolBuilder::new().num_threads(threads).build().unwrap();
            let f = pool.install(|| Fit::new(&design));
            let mut v = vec![f.grand_mean, f.sse, f.sst];
            v.extend(f.mean.iter().chain(&f.ss_within).chain(&f.centred_sums));
            v.iter().map(|x| x.to_bits()).collect::<Vec<_>>()
        };
        assert_eq!(bits(1), bits(4));
        // The sums are the plain sequential ones.
        let f = Fit::new(&design);
        let m0 = mean_two_pass(design.cell_values(0));
        assert_eq!(f.mean[0].to_bits(), m0.to_bits());
        let sst: f64 = design.y().iter().map(|v| (v - f.grand_mean) * (v - f.grand_mean)).sum();
        assert_eq!(f.sst.to_bits(), sst.to_bits());
    }
}
