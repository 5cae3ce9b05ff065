//! Diagnostics: the cell table, marginal means and assumption checks.
//!
//! Diagnostics describe; they never decide a verdict (the concordance does that).

pub mod cells;

use crate::design::Design;
use crate::model::Fit;
use crate::results::{finite, Diagnostics};

/// The diagnostics of a design: balance summaries now; normality, homogeneity and
/// outlier rules are added by the diagnostics engine work (METHODS §2).
pub fn diagnose(design: &Design, fit: &Fit) -> Diagnostics {
    let vars: Vec<f64> =
        (0..design.n_cells()).filter(|&c| fit.n[c] >= 2).map(|c| fit.ss_within[c] / (fit.n[c] - 1) as f64).collect();
    let variance_ratio = if vars.len() >= 2 {
        let max = vars.iter().cloned().fold(f64::NEG_INFINITY, f64::max);
        let min = vars.iter().cloned().fold(f64::INFINITY, f64::min);
        finite(max / min)
    } else {
        None
    };
    let n_max = *fit.n.iter().max().unwrap_or(&1) as f64;
    let n_min = *fit.n.iter().min().unwrap_or(&1) as f64;
    Diagnostics {
        levene: None,
        brown_forsythe: None,
        shapiro_wilk: None,
        outliers: Vec::new(),
        variance_ratio,
        n_ratio: n_max / n_min,
        flags: Vec::new(),
    }
}
