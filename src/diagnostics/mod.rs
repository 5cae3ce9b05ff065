//! Diagnostics: the cell table, marginal means and assumption checks.
//!
//! Diagnostics describe; they never decide a verdict (the concordance does that).
//! [`diagnose`] runs every check of METHODS §2 on the design — shape and Shapiro–Wilk
//! per cell and on the pooled residuals (`normality`), Levene, Brown–Forsythe and the
//! variance and size ratios (`homogeneity`), Tukey's fences and the MAD–median rule per
//! cell (`outliers`) — and raises flags only where a statistic is beyond what normal,
//! equal-variance data with the same cell sizes produce (`calibration`, `flags`). It
//! also works out which rows each drop rule of the sensitivity variant removes, so the
//! variant and the diagnostics can never disagree about what was flagged.

pub mod calibration;
pub mod cells;
pub mod flags;
pub mod homogeneity;
pub mod large_sample;
pub mod normality;
pub mod outliers;
pub mod plotdata;

use crate::config::DropRule;
use crate::design::Design;
use crate::model::Fit;
use crate::results::{
    finite, CalibratedCheck, Calibration, CellDiagnostics, Diagnostics, Flag, Outlier, ResidualShape, ShapiroWilk,
};
use calibration::{DatasetStats, NullMethod, NullReference, FLAG_LEVEL};
use flags::{lines_phrase, null_p_phrase, Code};
use homogeneity::{Centre, HomogeneityProblem};
use outliers::Rule;
use std::borrow::Cow;

/// Cell sizes above this ratio count as unequal for the variance–size pairing flag
/// (METHODS §11.2 rule 3; Blanca et al. 2018 report the F test's robustness breaking
/// down beyond ratios of about 1.5 in unbalanced designs). A design fact, not random.
pub const N_RATIO_UNEQUAL: f64 = 1.5;
/// Common practice (not a decision rule): |G1| and |G2| under 2 read as "close enough".
pub const COMMON_PRACTICE_SHAPE_LIMIT: f64 = 2.0;
/// |Spearman r| of cell size with variance from which the text names a direction
/// (descriptive wording only; the flag itself rests on the calibrated variance ratio).
pub const PAIRING_CLEAR: f64 = 0.3;
/// At most this many distinct values marks a discrete outcome (METHODS §11.2 rule 1).
pub const DISCRETE_MAX_DISTINCT: usize = 10;
/// More than this share of tied observations marks a discrete outcome (METHODS App. B).
pub const DISCRETE_TIED_SHARE: f64 = 0.25;

/// The rows a drop rule removes, and how often it removes anything from clean data.
#[derive(Debug, Clone, PartialEq)]
pub struct Removal {
    /// The rule.
    pub rule: DropRule,
    /// Canonical positions of the removed observations, ascending.
    pub rows: Vec<usize>,
    /// The rule in words, with its cut-offs.
    pub description: String,
    /// Share of simulated normal datasets with these cell sizes that lose a point.
    pub null_rate: Option<f64>,
}

/// Everything [`diagnose`] finds: the reported diagnostics and the removal sets of the
/// drop rules.
#[derive(Debug, Clone)]
pub struct Diagnosis {
    /// What goes into the results.
    pub diagnostics: Diagnostics,
    /// Rows removed by `--drop-rule far`.
    pub far: Removal,
    /// Rows removed by `--drop-rule mad`.
    pub mad: Removal,
}

impl Diagnosis {
    /// The removal of `rule`, or `None` for [`DropRule::None`].
    pub fn removal(&self, rule: DropRule) -> Option<&Removal> {
        match rule {
            DropRule::Far => Some(&self.far),
            DropRule::Mad => Some(&self.mad),
            DropRule::None => None,
        }
    }
}

/// Runs every diagnostic of METHODS §2 and calibrates the flags with a null simulation
/// seeded by `seed` ([`NullReference::for_design`]: streams `Purpose::Auxiliary`; the
/// design's cell sizes; large-sample draws when every cell is large). Never fails:
/// degenerate cells give `None` values and structural flags.
pub fn diagnose(design: &Design, fit: &Fit, seed: u64) -> Diagnosis {
    let sizes = design.cell_sizes();
    // The reference depends only on the cell sizes: it is built beside the data's own
    // statistics.
    diagnose_given(design, fit, || Cow::Owned(NullReference::for_design(&sizes, seed)))
}

/// [`diagnose`] against a given null reference (which must have been simulated with
/// this design's cell sizes). The calibration tests use it to judge many datasets of
/// one design against one reference.
pub fn diagnose_with(design: &Design, fit: &Fit, reference: &NullReference) -> Diagnosis {
    diagnose_given(design, fit, || Cow::Borrowed(reference))
}

/// The diagnostics, with the null reference from `reference` (run beside the passes
/// over the data).
fn diagnose_given<'r>(
    design: &Design,
    fit: &Fit,
    reference: impl FnOnce() -> Cow<'r, NullReference> + Send,
) -> Diagnosis {
    let loc = design.location();
    let n_cells = design.n_cells();
    let sizes = design.cell_sizes();
    let lines = design.lines();
    let cell_slices: Vec<&[f64]> = (0..n_cells).map(|c| design.cell_values(c)).collect();
    let sorted_slices: Vec<&[f64]> = (0..n_cells).map(|c| design.sorted_cell(c)).collect();
    let names: Vec<String> = (0..n_cells).map(|c| design.layout.cell_name(c)).collect();
    let screens: Vec<outliers::CellScreen> = {
        use rayon::prelude::*;
        (0..n_cells).into_par_iter().map(|c| outliers::screen_given_sorted(cell_slices[c], sorted_slices[c])).collect()
    };
    let mut flags_out: Vec<Flag> = Vec::new();
    let mut notes: Vec<String> = Vec::new();

    // Variances and ratios.
    let vars: Vec<Option<f64>> =
        (0..n_cells).map(|c| (fit.n[c] >= 2).then(|| fit.ss_within[c] / (fit.n[c] - 1) as f64)).collect();
    let with_var: Vec<usize> = (0..n_cells).filter(|&c| vars[c].is_some()).collect();
    let var_values: Vec<f64> = with_var.iter().filter_map(|&c| vars[c]).collect();
    let variance_ratio = homogeneity::ratio(&var_values).and_then(finite);
    let madn2: Vec<f64> = with_var.iter().map(|&c| screens[c].madn * screens[c].madn).collect();
    let robust_variance_ratio = homogeneity::ratio(&madn2).and_then(finite);
    let n_sizes: Vec<f64> = with_var.iter().map(|&c| sizes[c] as f64).collect();
    let n_variance_spearman = homogeneity::spearman(&n_sizes, &var_values);
    let n_max = sizes.iter().copied().max().unwrap_or(1) as f64;
    let n_min = sizes.iter().copied().min().unwrap_or(1).max(1) as f64;
    let n_ratio = n_max / n_min;

    // Homogeneity tests.
    // The four passes over all the data run side by side, and beside the null reference;
    // the flags they raise are pushed below in a fixed order.
    let medians: Vec<f64> = sorted_slices.iter().map(|s| crate::summary::median_sorted(s)).collect();
    let (reference, ((levene, brown_forsythe), (resid_shape, discrete))) = rayon::join(reference, || {
        rayon::join(
            || {
                rayon::join(
                    || homogeneity::levene(&cell_slices, Centre::Mean),
                    || homogeneity::levene_about(&cell_slices, &medians),
                )
            },
            || rayon::join(|| residual_shape(design, fit, &sorted_slices), || discreteness(&sorted_slices)),
        )
    });
    let reference: &NullReference = &reference;
    if let Err(problem) = levene {
        flags_out.push(Code::HomogeneityUndefined.flag(match problem {
            HomogeneityProblem::NoDf => {
                "Levene and Brown–Forsythe tests not computed: no cell has two or more observations"
            }
            HomogeneityProblem::ZeroDenominator => {
                "Levene test not computed: the absolute deviations do not vary within any cell"
            }
        }));
    } else if brown_forsythe.is_err() {
        flags_out.push(Code::HomogeneityUndefined.flag(
            "Brown–Forsythe test not computed: the absolute deviations from the medians do not vary within any cell",
        ));
    }

    // Pooled residuals.
    let residual_sw = resid_shape.shapiro_wilk.ok().and_then(sw_result);
    if resid_shape.n > normality::SW_MAX_VALIDATED_N {
        flags_out.push(Code::ShapiroLargeN.flag(format!(
            "Shapiro–Wilk on the {} pooled residuals: Royston's p-value is validated only up to n = 5000",
            resid_shape.n
        )));
    }

    // Per-cell structure.
    let mut cells_out = Vec::with_capacity(n_cells);
    let mut sw_na: Vec<String> = Vec::new();
    for c in 0..n_cells {
        let s = &screens[c];
        let n = sizes[c];
        let sw_problem = normality::sw_problem_sorted(sorted_slices[c]);
        if let Some(p) = sw_problem {
            sw_na.push(format!("{} ({})", names[c], p.reason()));
        }
        if n > normality::SW_MAX_VALIDATED_N {
            flags_out.push(Code::ShapiroLargeN.flag(format!(
                "cell {}: Shapiro–Wilk on {n} values: Royston's p-value is validated only up to n = 5000",
                names[c]
            )));
        }
        if n == 1 {
            flags_out.push(Code::SingleObservation.flag(format!(
                "cell {}: a single observation (line {}); it has no variance, and engines that need one leave it out or do not run",
                names[c],
                lines[design.cell_range(c).start]
            )));
        } else if fit.ss_within[c] <= 0.0 {
            flags_out.push(Code::ConstantCell.flag(format!(
                "cell {}: all {n} values are equal ({}); its variance is zero",
                names[c],
                fmt_value(loc + cell_slices[c][0])
            )));
        } else if s.madn <= 0.0 {
            flags_out.push(Code::MadZero.flag(format!(
                "cell {}: more than half of the values are equal, so MAD = 0 and the MAD–median rule does not apply there",
                names[c]
            )));
        }
        cells_out.push(CellDiagnostics {
            cell: names[c].clone(),
            n,
            q1: finite(loc + s.q1),
            q3: finite(loc + s.q3),
            madn: finite(s.madn),
            outside: s.outside.len(),
            far_out: s.far.len(),
            mad_median: s.mad.as_ref().map(Vec::len),
            shapiro_wilk_not_applicable: sw_problem.map(|p| p.reason().to_string()),
        });
    }
    if !sw_na.is_empty() {
        flags_out.push(Code::ShapiroNotApplicable.flag(format!(
            "Shapiro–Wilk not computed in {} cell(s): {}",
            sw_na.len(),
            sw_na.join("; ")
        )));
    }

    // Discrete outcome: few distinct values, or many ties.
    if let Some(flag) = discrete {
        flags_out.push(flag);
    }

    // Outlier list, by cell, rule, line.
    let mut outliers_out = Vec::new();
    for c in 0..n_cells {
        let start = design.cell_range(c).start;
        for rule in [Rule::TukeyOutside, Rule::TukeyFar, Rule::MadMedian] {
            for &i in screens[c].flagged(rule) {
                outliers_out.push(Outlier {
                    line: lines[start + i],
                    cell: names[c].clone(),
                    value: loc + cell_slices[c][i],
                    rule: rule.id().to_string(),
                });
            }
        }
    }

    // Calibration against normal data with these cell sizes.
    let counts: Vec<outliers::ScreenCounts> = (0..n_cells).map(|c| screens[c].counts(sorted_slices[c])).collect();
    let observed = calibration::dataset_stats_from_counts(&cell_slices, &counts);
    let datasets = reference.datasets;
    let mut checks = Vec::new();
    let mut check = |id: &str,
                     description: &str,
                     value: f64,
                     stat: &dyn Fn(&DatasetStats) -> f64,
                     p: Option<f64>,
                     flagged: bool| {
        checks.push(CalibratedCheck {
            id: id.into(),
            description: description.into(),
            value: finite(value),
            null_mean: finite(reference.mean(stat)),
            null_median: finite(reference.median(stat)),
            null_p: p,
            flagged,
        });
    };
    let fires = |p: Option<f64>| p.is_some_and(|p| p <= FLAG_LEVEL + 1e-12);

    // Heavy tails: pooled residual G2.
    let g2 = observed.residual_g2;
    let p_g2 = reference.p_upper(g2, |s| s.residual_g2);
    let g2_mean = reference.mean(|s| s.residual_g2);
    check(
        "residual_excess_kurtosis",
        "excess kurtosis G2 of the pooled residuals (upper tail)",
        g2,
        &|s| s.residual_g2,
        p_g2,
        fires(p_g2),
    );
    if fires(p_g2) {
        flags_out.push(Code::HeavyTails.flag(format!(
            "the pooled residuals have heavier tails than normal data: excess kurtosis G2 = {} where normal data with these cell sizes average {} ({})",
            fmt2(g2),
            fmt2(g2_mean),
            null_p_phrase(p_g2.unwrap_or(1.0), datasets)
        )));
    }
    // Skew: |G1| of the pooled residuals.
    let g1 = observed.residual_g1;
    let p_g1 = reference.p_upper(g1.abs(), |s| s.residual_g1.abs());
    check(
        "residual_abs_skewness",
        "|skewness G1| of the pooled residuals",
        g1.abs(),
        &|s| s.residual_g1.abs(),
        p_g1,
        fires(p_g1),
    );
    if fires(p_g1) {
        let side = if g1 > 0.0 { "right (long upper tail)" } else { "left (long lower tail)" };
        flags_out.push(Code::SkewedResiduals.flag(format!(
            "the pooled residuals are skewed to the {side}: G1 = {} ({} against normal data with these cell sizes)",
            fmt2(g1),
            null_p_phrase(p_g1.unwrap_or(1.0), datasets)
        )));
    }
    // Outliers: the most extreme point by its n-adjusted MAD score (a max-type test).
    let any_scored = screens.iter().any(|s| s.madn > 0.0);
    let min_tail = observed.min_mad_tail;
    let p_ext = if any_scored { reference.p_lower(min_tail, |s| s.min_mad_tail) } else { None };
    check(
        "most_extreme_point",
        "most extreme point: n-adjusted tail level of its MAD score (small = extreme)",
        min_tail,
        &|s| s.min_mad_tail,
        p_ext,
        fires(p_ext),
    );
    if fires(p_ext) {
        let cut = reference.mad_tail_threshold(FLAG_LEVEL);
        let mut beyond = points_beyond(design, &screens, cut);
        beyond.sort_by(|a, b| a.3.total_cmp(&b.3));
        let listed: Vec<String> = beyond
            .iter()
            .take(10)
            .map(|&(c, i, score, _)| {
                format!(
                    "line {} (cell {}, {} MADN from the median)",
                    lines[design.cell_range(c).start + i],
                    names[c],
                    fmt2(score)
                )
            })
            .collect();
        let more = if beyond.len() > 10 { format!(" and {} more", beyond.len() - 10) } else { String::new() };
        flags_out.push(Code::Outliers.flag(format!(
            "{} further from their cell median than normal data with these cell sizes produce: {}{more} ({} for the most extreme)",
            if beyond.len() == 1 { "1 point lies".to_string() } else { format!("{} points lie", beyond.len()) },
            listed.join("; "),
            null_p_phrase(p_ext.unwrap_or(1.0), datasets)
        )));
    }
    // MAD–median count (information).
    let mad_count = observed.mad as f64;
    let p_mad = reference.p_upper(mad_count, |s| s.mad as f64);
    check(
        "mad_median_count",
        "points more than 2.24 MADN from their cell median, all cells (information; raises no flag)",
        mad_count,
        &|s| s.mad as f64,
        p_mad,
        false,
    );
    // Far-out count.
    let far_count = observed.far as f64;
    let p_far = reference.p_upper(far_count, |s| s.far as f64);
    check(
        "far_out_count",
        "points beyond 3 × IQR from their cell quartiles, all cells",
        far_count,
        &|s| s.far as f64,
        p_far,
        fires(p_far),
    );
    if fires(p_far) {
        for c in 0..n_cells {
            if screens[c].far.is_empty() {
                continue;
            }
            let start = design.cell_range(c).start;
            let mut far_lines: Vec<u64> = screens[c].far.iter().map(|&i| lines[start + i]).collect();
            far_lines.sort_unstable();
            flags_out.push(Code::FarOut.flag(format!(
                "cell {}: {} far-out {} at {} (beyond 3 × IQR from the quartiles; the design has more far-out points than normal data give, {})",
                names[c],
                far_lines.len(),
                if far_lines.len() == 1 { "point" } else { "points" },
                lines_phrase(&far_lines),
                null_p_phrase(p_far.unwrap_or(1.0), datasets)
            )));
        }
    }
    // Variance ratio (a zero-variance cell is reported as a constant cell instead).
    let vr = observed.variance_ratio;
    let p_vr = if vr.is_finite() { reference.p_upper(vr, |s| s.variance_ratio) } else { None };
    let vr_fires = fires(p_vr);
    check("variance_ratio", "largest/smallest cell variance", vr, &|s| s.variance_ratio, p_vr, vr_fires);
    if vr_fires {
        let (hi, lo) = extreme_cells(&with_var, &vars);
        flags_out.push(Code::UnequalVariances.flag(format!(
            "cell variances differ more than normal data give: largest/smallest = {} (cell {} vs cell {}; {})",
            fmt2(vr),
            names[hi],
            names[lo],
            null_p_phrase(p_vr.unwrap_or(1.0), datasets)
        )));
        if n_ratio > N_RATIO_UNEQUAL {
            let pairing = match n_variance_spearman {
                Some(r) if r <= -PAIRING_CLEAR => format!(
                    "; larger cells have the smaller variances (Spearman r = {}), which makes the classical F liberal",
                    fmt2(r)
                ),
                Some(r) if r >= PAIRING_CLEAR => format!(
                    "; larger cells have the larger variances (Spearman r = {}), which makes the classical F conservative",
                    fmt2(r)
                ),
                Some(r) => format!("; no clear pairing of cell size with variance (Spearman r = {})", fmt2(r)),
                None => String::new(),
            };
            flags_out.push(Code::UnequalVariancesUnequalN.flag(format!(
                "unequal variances with unequal cell sizes (largest/smallest n = {}){pairing}; prefer engines that allow unequal variances (Box 1954; Glass, Peckham & Sanders 1972; Blanca et al. 2018)",
                fmt2(n_ratio)
            )));
        }
    }
    let rvr = observed.robust_variance_ratio;
    let p_rvr = if rvr.is_finite() { reference.p_upper(rvr, |s| s.robust_variance_ratio) } else { None };
    check(
        "robust_variance_ratio",
        "largest/smallest cell MADN² (information; raises no flag)",
        rvr,
        &|s| s.robust_variance_ratio,
        p_rvr,
        false,
    );

    // Drop rules of the sensitivity variant.
    let far_rows: Vec<usize> = (0..n_cells)
        .flat_map(|c| {
            let start = design.cell_range(c).start;
            screens[c].far.iter().map(move |&i| start + i)
        })
        .collect();
    let far = Removal {
        rule: DropRule::Far,
        rows: far_rows,
        description: Rule::TukeyFar.describe().to_string(),
        null_rate: Some(reference.rate(|s| s.far > 0)),
    };
    let threshold = reference.mad_drop_threshold();
    let mad_rows: Vec<usize> =
        points_beyond(design, &screens, threshold).iter().map(|&(c, i, _, _)| design.cell_range(c).start + i).collect();
    let mut distinct_n: Vec<usize> = sizes.clone();
    distinct_n.sort_unstable();
    distinct_n.dedup();
    let cutoffs: Vec<String> = distinct_n
        .iter()
        .take(8)
        .map(|&n| format!("n = {n}: {}", fmt2(outliers::mad_cutoff_for_tail(threshold, n))))
        .collect();
    let mad = Removal {
        rule: DropRule::Mad,
        rows: mad_rows,
        description: format!(
            "more than K(n) MADN from the cell median, K adjusted to the cell sizes so that at most {:.0}% of normal datasets with these cell sizes lose a point (K by cell size: {}{})",
            calibration::DROP_LEVEL * 100.0,
            cutoffs.join(", "),
            if distinct_n.len() > 8 { ", …" } else { "" }
        ),
        null_rate: Some(reference.rate(|s| s.min_mad_tail < threshold)),
    };

    // Information that decides nothing.
    let beyond: Vec<String> = (0..n_cells)
        .filter(|&c| {
            let v = cell_slices[c];
            let (g1, g2) = crate::summary::skewness_and_kurtosis(v);
            let (g1, g2) = (g1.unwrap_or(0.0), g2.unwrap_or(0.0));
            g1.abs() > COMMON_PRACTICE_SHAPE_LIMIT || g2.abs() > COMMON_PRACTICE_SHAPE_LIMIT
        })
        .map(|c| names[c].clone())
        .collect();
    let any_shape = (0..n_cells).any(|c| crate::summary::skewness(cell_slices[c]).is_some());
    notes.push(if !any_shape {
        "common practice, decides nothing: |G1| and |G2| under 2 are often read as close enough to normal; no cell has the 3 or more varying values they need".to_string()
    } else if beyond.is_empty() {
        "common practice, decides nothing: |G1| and |G2| under 2 are often read as close enough to normal; every cell is within it".to_string()
    } else {
        format!(
            "common practice, decides nothing: |G1| and |G2| under 2 are often read as close enough to normal; outside it: {}",
            beyond.join("; ")
        )
    });
    let calibration = Calibration {
        method: match reference.method {
            NullMethod::Simulation => format!(
                "Monte Carlo test against {datasets} simulated datasets with normal errors, equal variances and these cell sizes (seeded, reproducible); p = (1 + #{{simulated ≥ observed}})/(R + 1)"
            ),
            NullMethod::LargeSample => format!(
                "Monte Carlo test against {datasets} draws of the statistics from their large-sample distributions under normal errors, equal variances and these cell sizes (every cell has at least {} observations; seeded, reproducible); p = (1 + #{{simulated ≥ observed}})/(R + 1)",
                large_sample::LARGE_CELL
            ),
        },
        reference: match reference.method {
            NullMethod::Simulation => "simulation",
            NullMethod::LargeSample => "large-sample",
        }
        .to_string(),
        datasets,
        level: FLAG_LEVEL,
        checks,
    };
    notes.push(format!(
        "flags are calibrated: each compares a statistic with {} and fires only when p ≤ {FLAG_LEVEL}; Shapiro–Wilk and Levene p-values are information, not decisions",
        calibration.against()
    ));
    notes.push(
        "the pooled residuals are not independent (each cell's residuals sum to zero), so their Shapiro–Wilk p is descriptive"
            .to_string(),
    );

    let diagnostics = Diagnostics {
        levene: levene.ok().and_then(f_result),
        brown_forsythe: brown_forsythe.ok().and_then(f_result),
        shapiro_wilk: residual_sw,
        outliers: outliers_out,
        variance_ratio,
        n_ratio,
        flags: flags_out,
        residuals: Some(ResidualShape {
            n: resid_shape.n,
            skewness: resid_shape.skewness,
            skewness_se: resid_shape.skewness_se,
            excess_kurtosis: resid_shape.excess_kurtosis,
            excess_kurtosis_se: resid_shape.excess_kurtosis_se,
        }),
        robust_variance_ratio,
        n_variance_spearman: n_variance_spearman.and_then(finite),
        quantile_definition: outliers::QUANTILE_DEFINITION.to_string(),
        cells: cells_out,
        calibration: Some(calibration),
        notes,
    };
    Diagnosis { diagnostics, far, mad }
}

/// Shape of the pooled residuals y − ȳ_c: moments in canonical order (walked cell by
/// cell, not collected), Shapiro–Wilk on the residuals sorted. Each cell's sorted values
/// less its mean are an ascending run (subtraction rounds monotonically), so sorting
/// the residuals is merging the runs.
fn residual_shape(design: &Design, fit: &Fit, sorted_cells: &[&[f64]]) -> normality::Shape {
    use rayon::prelude::*;
    let n = design.n_obs();
    let mut runs = vec![0.0; n];
    design.split_cells_mut(&mut runs).into_par_iter().enumerate().for_each(|(c, run)| {
        let m = fit.mean[c];
        for (r, &v) in run.iter_mut().zip(sorted_cells[c]) {
            *r = v - m;
        }
    });
    let bounds: Vec<usize> = (0..design.n_cells()).map(|c| design.cell_range(c).start).chain([n]).collect();
    let sorted = crate::summary::merge_sorted_runs(runs, &bounds, |&v| crate::summary::total_order_key(v));
    let residuals = (0..design.n_cells()).flat_map(|c| design.cell_values(c).iter().map(move |&v| v - fit.mean[c]));
    let moments = crate::summary::skewness_and_kurtosis_of(n, residuals);
    normality::Shape::new(n, moments, normality::shapiro_wilk_sorted_owned(sorted))
}

/// A Shapiro–Wilk result for the results, or `None` if a number is not finite.
pub fn sw_result(t: normality::SwTest) -> Option<ShapiroWilk> {
    (t.w.is_finite() && t.p.is_finite()).then_some(ShapiroWilk { w: t.w, p: t.p })
}

fn f_result(t: crate::results::FTest) -> Option<crate::results::FTest> {
    (t.f.is_finite() && t.p.is_finite()).then_some(t)
}

/// The points whose n-adjusted MAD-score tail level ([`outliers::mad_score_tail`]) is
/// below `cut`, as (cell, position in the cell, score, tail level) in cell and position
/// order. The level falls as the score grows, so each sorted cell is walked in from
/// both ends, the larger distance from the median first, until a point is not below
/// the cut: O(points found) per cell instead of a tail level for every point.
fn points_beyond(design: &Design, screens: &[outliers::CellScreen], cut: f64) -> Vec<(usize, usize, f64, f64)> {
    let mut out = Vec::new();
    for (c, s) in screens.iter().enumerate() {
        if s.madn <= 0.0 {
            continue;
        }
        let (sorted, positions) = (design.sorted_cell(c), design.sorted_positions(c));
        let n = sorted.len();
        let score = |k: usize| (sorted[k] - s.median).abs() / s.madn;
        let (mut lo, mut hi) = (0usize, n);
        while lo < hi {
            let k = if score(lo) >= score(hi - 1) { lo } else { hi - 1 };
            let tail = outliers::mad_score_tail(score(k), n);
            if tail.is_nan() || tail >= cut {
                break;
            }
            out.push((c, positions[k], score(k), tail));
            if k == lo {
                lo += 1;
            } else {
                hi -= 1;
            }
        }
    }
    out.sort_by_key(|&(c, i, _, _)| (c, i));
    out
}

/// Cells with the largest and smallest variance among `with_var`.
fn extreme_cells(with_var: &[usize], vars: &[Option<f64>]) -> (usize, usize) {
    let v = |c: usize| vars[c].unwrap_or(f64::NAN);
    let hi = with_var.iter().copied().max_by(|&a, &b| v(a).total_cmp(&v(b))).unwrap_or(0);
    let lo = with_var.iter().copied().min_by(|&a, &b| v(a).total_cmp(&v(b))).unwrap_or(0);
    (hi, lo)
}

/// A flag when the outcome has ties and at most [`DISCRETE_MAX_DISTINCT`] distinct
/// values (`discrete-outcome`, METHODS §11.2 rule 1) or more than
/// [`DISCRETE_TIED_SHARE`] tied observations (`many-ties`, METHODS Appendix B);
/// continuous data never trigger either. Takes every cell sorted.
fn discreteness(sorted_cells: &[&[f64]]) -> Option<Flag> {
    use rayon::prelude::*;
    // Each cell's distinct values with their counts (equal values are adjacent in a
    // sorted cell), then the same across cells: the data are sorted only as far as they
    // are distinct.
    let compress = |sorted: &[f64]| {
        let mut out: Vec<(f64, usize)> = Vec::new();
        for &v in sorted {
            match out.last_mut() {
                Some((last, count)) if *last == v => *count += 1,
                _ => out.push((v, 1)),
            }
        }
        out
    };
    let per_cell: Vec<Vec<(f64, usize)>> = sorted_cells.par_iter().map(|s| compress(s)).collect();
    let bounds: Vec<usize> = std::iter::once(0)
        .chain(per_cell.iter().scan(0, |end, run| {
            *end += run.len();
            Some(*end)
        }))
        .collect();
    let all = crate::summary::merge_sorted_runs(per_cell.concat(), &bounds, |e: &(f64, usize)| {
        crate::summary::total_order_key(e.0)
    });
    let n: usize = sorted_cells.iter().map(|s| s.len()).sum();
    let (mut distinct, mut tied) = (0usize, 0usize);
    let mut i = 0;
    while i < all.len() {
        let mut count = all[i].1;
        let mut j = i;
        while j + 1 < all.len() && all[j + 1].0 == all[i].0 {
            j += 1;
            count += all[j].1;
        }
        distinct += 1;
        if count > 1 {
            tied += count;
        }
        i = j + 1;
    }
    if tied == 0 {
        return None;
    }
    let share = tied as f64 / n as f64;
    if distinct <= DISCRETE_MAX_DISTINCT {
        Some(Code::DiscreteOutcome.flag(format!(
            "the outcome takes only {distinct} distinct values: an ordinal or discrete outcome (e.g. a rating), where the rank-based ATS suits better than methods for continuous data and ART is not recommended"
        )))
    } else if share > DISCRETE_TIED_SHARE {
        Some(Code::ManyTies.flag(format!(
            "{:.0}% of observations share their value with another (rounded or discrete measurements): rank-based engines use mid-ranks, and ART is not recommended with heavy ties",
            share * 100.0
        )))
    } else {
        None
    }
}

fn fmt2(x: f64) -> String {
    if !x.is_finite() {
        return "undefined".into();
    }
    if x.abs() >= 100.0 {
        format!("{x:.0}")
    } else {
        format!("{x:.2}")
    }
}

fn fmt_value(x: f64) -> String {
    let s = format!("{x:.6}");
    let s = s.trim_end_matches('0').trim_end_matches('.');
    s.to_string()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::design::Factor;

    fn factor(name: &str, levels: &[&str]) -> Factor {
        Factor { name: name.into(), levels: levels.iter().map(|s| s.to_string()).collect(), measured: false }
    }

    fn methods12() -> Design {
        Design::from_cells(
            "y",
            vec![factor("A", &["a1", "a2"]), factor("B", &["b1", "b2", "b3"])],
            &[
                vec![9.6, 10.2, 9.9, 10.0, 9.2],
                vec![9.1, 9.8, 11.3, 9.7, 9.8, 12.1, 10.7],
                vec![11.9, 12.0, 13.5, 15.0, 13.2, 16.2],
                vec![13.8, 9.6, 9.4, 9.9, 9.2, 10.1, 9.8, 9.9],
                vec![10.9, 11.6, 14.8, 14.9, 10.3, 12.6],
                vec![13.4, 14.9, 18.5, 19.2, 12.1, 14.9, 17.6],
            ],
        )
        .unwrap()
    }

    #[test]
    fn methods_12_1_pooled_residuals_and_ratios() {
        // METHODS §12.1: pooled residual SW W = 0.9528770285, p = 0.1027428661;
        // G1 = 0.4325530703, G2 = 0.1459233735; VR = 47.32456140; NR = 1.6.
        let d = methods12();
        let fit = Fit::new(&d);
        let dx = diagnose(&d, &fit, 1).diagnostics;
        let sw = dx.shapiro_wilk.unwrap();
        assert!((sw.w - 0.9528770285).abs() < 1e-8 && (sw.p - 0.1027428661).abs() < 2e-6);
        let r = dx.residuals.unwrap();
        assert!((r.skewness.unwrap() - 0.4325530703).abs() < 1e-9);
        assert!((r.excess_kurtosis.unwrap() - 0.1459233735).abs() < 1e-9);
        assert!((dx.variance_ratio.unwrap() - 47.32456140).abs() < 1e-7);
        assert!((dx.n_ratio - 1.6).abs() < 1e-15);
        // Tukey 1.5 and MAD–median flag only 13.8 in a2b1, at line 2 + 18 = 20
        // (from_cells numbers lines from 2 in cell order; a2b1 starts at position 18).
        let tukey: Vec<&Outlier> = dx.outliers.iter().filter(|o| o.rule == "tukey-1.5").collect();
        assert_eq!(tukey.len(), 1);
        assert_eq!((tukey[0].line, tukey[0].value), (20, 13.8));
        let mad: Vec<&Outlier> = dx.outliers.iter().filter(|o| o.rule == "mad-median").collect();
        assert_eq!(mad.len(), 1);
        assert_eq!(mad[0].cell, "A=a2, B=b1");
        // VR = 47 with n from 5 to 8 is far beyond normal sampling variation.
        assert!(dx.flags.iter().any(|f| f.code == "unequal-variances"), "{:?}", dx.flags);
        assert!(dx.flags.iter().any(|f| f.code == "unequal-variances-unequal-n"), "{:?}", dx.flags);
    }

    #[test]
    fn degenerate_cells_flag_and_never_give_nan() {
        let d = Design::from_cells(
            "y",
            vec![factor("A", &["a1", "a2"]), factor("B", &["b1", "b2"])],
            &[vec![1.0], vec![2.0, 2.0, 2.0], vec![1.0, 1.0, 1.0, 5.0], vec![0.5, 3.0]],
        )
        .unwrap();
        let fit = Fit::new(&d);
        let dg = diagnose(&d, &fit, 1);
        let codes: Vec<&str> = dg.diagnostics.flags.iter().map(|f| f.code.as_str()).collect();
        for want in
            ["single-observation", "constant-cell", "mad-zero", "shapiro-wilk-not-applicable", "discrete-outcome"]
        {
            assert!(codes.contains(&want), "{want} missing from {codes:?}");
        }
        let json = serde_json::to_string(&dg.diagnostics).unwrap();
        assert!(!json.contains("NaN") && !json.contains("Infinity"), "{json}");
        assert!(dg.diagnostics.variance_ratio.is_none());
    }

    #[test]
    fn extreme_magnitudes_never_give_nan_or_panic() {
        let d = Design::from_cells(
            "y",
            vec![factor("A", &["a1", "a2"]), factor("B", &["b1", "b2"])],
            &[
                vec![1e300, -1e300, 0.0, 5.0],
                vec![1e-300, 2e-300, 3e-300],
                vec![1.0, 2.0, 3.0],
                vec![-1e300, 1e300, 7.0],
            ],
        )
        .unwrap();
        let fit = Fit::new(&d);
        let dg = diagnose(&d, &fit, 3);
        let json = serde_json::to_string(&dg.diagnostics).unwrap();
        assert!(!json.contains("NaN") && !json.contains("Infinity"));
        assert!(dg.diagnostics.flags.iter().all(|f| !f.message.contains("NaN") && !f.message.contains("inf ")));
    }

    #[test]
    fn removal_rules_name_canonical_rows() {
        let d = methods12();
        let fit = Fit::new(&d);
        let dg = diagnose(&d, &fit, 1);
        // 13.8 in a2b1 is beyond 3 × IQR (11.15): canonical position 18.
        assert_eq!(dg.far.rows, vec![18]);
        assert!(dg.far.null_rate.unwrap() > 0.0);
        // The calibrated MAD rule removes only points far beyond the normal range.
        assert!(dg.mad.rows.iter().all(|&i| i == 18), "{:?}", dg.mad.rows);
        let rate = dg.mad.null_rate.unwrap();
        assert!(rate <= calibration::DROP_LEVEL + 1e-12, "{rate}");
    }
}
