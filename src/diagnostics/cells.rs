//! The cell table and marginal means.
//!
//! Location statistics are computed on the centred outcome and shifted back by the
//! design's location, so data with a large common offset keep their digits.

use crate::design::Design;
use crate::dist;
use crate::model::{mean_two_pass, Fit};
use crate::results::{finite, CellSummary, Interval, MarginalMean};
use crate::summary;

/// One row per cell, in cell order (cells computed in parallel, each on its own).
///
/// `trim` is the trimming proportion for the trimmed mean and winsorized sd;
/// `ci_level` the level of the t interval for each cell mean (own sd, df n − 1).
pub fn cell_table(design: &Design, trim: f64, ci_level: f64) -> Vec<CellSummary> {
    use rayon::prelude::*;
    let loc = design.location();
    (0..design.n_cells())
        .into_par_iter()
        .map(|c| {
            let v = design.cell_values(c);
            let sorted = design.sorted_cell(c);
            let n = v.len();
            let order = summary::order_summary_sorted(sorted, trim);
            let (skewness, excess_kurtosis) = summary::skewness_and_kurtosis(v);
            let mean = mean_two_pass(v);
            let sd = summary::variance(v).sqrt();
            let se = sd / (n as f64).sqrt();
            let mean_ci = (n >= 2).then(|| {
                let t = dist::t_quantile(0.5 + ci_level / 2.0, (n - 1) as f64);
                Interval { low: finite(loc + mean - t * se), high: finite(loc + mean + t * se), level: ci_level }
            });
            CellSummary {
                levels: design.layout.cell_labels(c),
                n,
                mean: loc + mean,
                sd: finite(sd),
                se: finite(se),
                mean_ci,
                median: loc + order.median,
                trimmed_mean: loc + order.trimmed_mean,
                trim,
                winsorized_sd: finite(order.winsorized_variance.sqrt()),
                skewness,
                skewness_se: summary::skewness_se(n),
                excess_kurtosis,
                excess_kurtosis_se: summary::excess_kurtosis_se(n),
                min: loc + order.min,
                max: loc + order.max,
                shapiro_wilk: super::normality::shapiro_wilk_sorted(sorted).ok().and_then(super::sw_result),
            }
        })
        .collect()
}

/// Unweighted and weighted marginal means of every level of every factor, with t
/// intervals from the pooled error of the full model (df N − C):
/// unweighted SE = √(MSE·Σ_c 1/n_c)/m over the m cells at the level; weighted SE = √(MSE/n_level).
pub fn marginal_means(design: &Design, fit: &Fit, ci_level: f64) -> Vec<MarginalMean> {
    let loc = design.location();
    let layout = &design.layout;
    let mse = fit.mse();
    let df = fit.df_error as f64;
    let t = if fit.df_error > 0 { dist::t_quantile(0.5 + ci_level / 2.0, df) } else { f64::NAN };
    let interval = |centre: f64, se: f64| {
        let (low, high) = (finite(loc + centre - t * se), finite(loc + centre + t * se));
        (low.is_some() && high.is_some()).then_some(Interval { low, high, level: ci_level })
    };
    let cell_levels: Vec<Vec<usize>> = (0..design.n_cells()).map(|c| layout.cell_levels(c)).collect();
    let mut out = Vec::new();
    for (f, factor) in layout.factors.iter().enumerate() {
        for (l, label) in factor.levels.iter().enumerate() {
            let cells: Vec<usize> = (0..design.n_cells()).filter(|&c| cell_levels[c][f] == l).collect();
            let m = cells.len() as f64;
            let n: usize = cells.iter().map(|&c| fit.n[c]).sum();
            let unweighted = cells.iter().map(|&c| fit.mean[c]).sum::<f64>() / m;
            let weighted = cells.iter().map(|&c| fit.mean[c] * fit.n[c] as f64).sum::<f64>() / n as f64;
            let se_u = (mse * cells.iter().map(|&c| 1.0 / fit.n[c] as f64).sum::<f64>()).sqrt() / m;
            let se_w = (mse / n as f64).sqrt();
            out.push(MarginalMean {
                factor: factor.name.clone(),
                level: label.clone(),
                n,
                unweighted_mean: loc + unweighted,
                unweighted_ci: interval(unweighted, se_u),
                weighted_mean: loc + weighted,
                weighted_ci: interval(weighted, se_w),
            });
        }
    }
    out
}
