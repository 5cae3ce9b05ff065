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
        let grand_mean = mean_two_pass(y);
        let mut mean = Vec::with_capacity(n.len());
        let mut ss_within = Vec::with_capacity(n.len());
        let mut centred_sums = Vec::with_capacity(n.len());
        for c in 0..n.len() {
            let v = design.cell_values(c);
            let m = mean_two_pass(v);
            mean.push(m);
            ss_within.push(v.iter().map(|x| (x - m) * (x - m)).sum());
            centred_sums.push(v.iter().map(|x| x - grand_mean).sum());
        }
        let sse = ss_within.iter().sum();
        let sst = y.iter().map(|x| (x - grand_mean) * (x - grand_mean)).sum();
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
