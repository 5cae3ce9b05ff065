//! Stratified bootstrap intervals of the estimates reviewers ask about (METHODS §8.1–§8.3,
//! §8.5): cell means and trimmed means, unweighted and weighted marginal means, pairwise
//! differences of levels, 2×2 interaction contrasts, partial η² and partial ω² of every
//! term, and the robust d of 1-df terms. They are descriptive and never a decision rule
//! (METHODS Overrides 10).
//!
//! Why this shape:
//! * **Every statistic is a function of per-cell summaries** (mean, within-cell SS,
//!   trimmed summaries), so one resample costs O(N) to summarise and O(C·q) per term,
//!   and every statistic sees the **same** resamples (paired, METHODS §8.1).
//! * **No sort inside the loop.** Each cell is sorted once; a resample draws canonical
//!   indices j = bounded(n_c) (METHODS §10.3: cells in cell order, observations in
//!   order), counts them at j's sorted position, and expands the counts into a sorted
//!   sample in O(n_c), which [`TrimmedCell::from_sorted`] summarises.
//! * **Values are centred at their cell mean**, so within-cell sums of squares from
//!   Σd and Σd² keep their digits whatever the outcome's offset.
//! * **The stratified jackknife (for BCa's acceleration) is O(1) per deleted
//!   observation and affected statistic**: linear statistics change by w_c·Δμ_c; the
//!   leave-one-out trimmed summaries come from prefix sums of the sorted cell; a
//!   term's Type III SS after deleting one observation of cell c is a rank-one
//!   (Sherman–Morrison) update of (Lμ)'(L D⁻¹L')⁻¹(Lμ) (see [`super::TermProjection`]).
//! * Resampling runs over fixed chunks with streams keyed (seed, [`Purpose::Bootstrap`],
//!   0, chunk), results are stored at their resample index, and every floating reduction
//!   (means, SDs, sorting) happens afterwards in index order, so the thread count never
//!   changes a digit.

use super::{TermProjection, INTERVAL_CELL_LIMIT};
use crate::design::forms::SsForms;
use crate::design::Design;
use crate::error::{Error, Result};
use crate::model::wald::WaldForm;
use crate::model::Fit;
use crate::resample::interval::{self, Acceleration, Ends, IntervalProblem};
use crate::resample::progress::{Progress, Visibility};
use crate::resample::{self, Purpose, Stream};
use crate::results::{finite, BootstrapInterval, IntervalEnds, IntervalFamily};
use crate::robust::{self, TrimmedCell};
use crate::summary;
use rayon::prelude::*;

/// At most this many estimates get an interval; families are dropped from the end of
/// the list (interaction contrasts first) beyond it, and the omission is reported.
pub const MAX_STATISTICS: usize = 2000;

/// At most this many resampled values are stored (estimates × resamples; 256 MB), so
/// large `--resamples` shrink the list of estimates rather than exhaust memory.
pub const MAX_STORED_DRAWS: u64 = 1 << 25;

/// Which cell summary a linear statistic combines.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Basis {
    Mean,
    Trimmed,
}

/// How a statistic is computed from the cell summaries.
#[derive(Debug, Clone)]
enum Kind {
    /// Σ_c w_c x_c over the cell means or trimmed means.
    Linear { basis: Basis, coef: Vec<(usize, f64)> },
    /// Σ_c n_c ȳ_c / Σ_c n_c over `cells` (the mean of the observations at a level).
    Weighted { cells: Vec<usize> },
    /// Partial η² of term t (Type III).
    PartialEta(usize),
    /// Partial ω² of term t (Type III).
    PartialOmega(usize),
    /// Robust d of 1-df term t ([`robust::akp_contrast`] on the term's contrast row).
    RobustD(usize),
}

/// One estimate that gets an interval.
#[derive(Debug, Clone)]
struct Spec {
    family: IntervalFamily,
    term: Option<String>,
    label: String,
    kind: Kind,
}

impl Kind {
    /// The term of an effect-size statistic.
    fn effect_term(&self) -> Option<usize> {
        match self {
            Kind::PartialEta(t) | Kind::PartialOmega(t) | Kind::RobustD(t) => Some(*t),
            _ => None,
        }
    }
}

impl Spec {
    /// Location estimates are reported in outcome units (the design's location added).
    fn is_location(&self) -> bool {
        matches!(
            self.family,
            IntervalFamily::CellMean
                | IntervalFamily::CellTrimmedMean
                | IntervalFamily::MarginalMeanUnweighted
                | IntervalFamily::MarginalMeanWeighted
        )
    }
}

/// The list of estimates of a design, in report order, with what had to be left out.
fn catalogue(design: &Design, resamples: u64) -> (Vec<Spec>, Vec<String>) {
    let layout = &design.layout;
    let n_cells = design.n_cells();
    let levels: Vec<Vec<usize>> = (0..n_cells).map(|c| layout.cell_levels(c)).collect();
    let k = layout.factors.len();
    let mut families: Vec<(&str, Vec<Spec>)> = Vec::new();

    let cell = |basis: Basis, family: IntervalFamily| -> Vec<Spec> {
        (0..n_cells)
            .map(|c| Spec {
                family,
                term: None,
                label: layout.cell_name(c),
                kind: Kind::Linear { basis, coef: vec![(c, 1.0)] },
            })
            .collect()
    };
    families.push(("cell means", cell(Basis::Mean, IntervalFamily::CellMean)));
    families.push(("cell trimmed means", cell(Basis::Trimmed, IntervalFamily::CellTrimmedMean)));

    let at_level = |f: usize, l: usize| -> Vec<usize> { (0..n_cells).filter(|&c| levels[c][f] == l).collect() };
    let mut unweighted = Vec::new();
    let mut weighted = Vec::new();
    let mut differences = Vec::new();
    for (f, factor) in layout.factors.iter().enumerate() {
        for (l, label) in factor.levels.iter().enumerate() {
            let cells = at_level(f, l);
            let m = cells.len() as f64;
            unweighted.push(Spec {
                family: IntervalFamily::MarginalMeanUnweighted,
                term: Some(factor.name.clone()),
                label: format!("{}={label}", factor.name),
                kind: Kind::Linear { basis: Basis::Mean, coef: cells.iter().map(|&c| (c, 1.0 / m)).collect() },
            });
            weighted.push(Spec {
                family: IntervalFamily::MarginalMeanWeighted,
                term: Some(factor.name.clone()),
                label: format!("{}={label}", factor.name),
                kind: Kind::Weighted { cells },
            });
        }
        let a = factor.levels.len();
        for i in 0..a {
            for j in i + 1..a {
                let (ci, cj) = (at_level(f, i), at_level(f, j));
                let m = ci.len() as f64;
                let coef = ci.iter().map(|&c| (c, 1.0 / m)).chain(cj.iter().map(|&c| (c, -1.0 / m))).collect();
                differences.push(Spec {
                    family: IntervalFamily::LevelDifference,
                    term: Some(factor.name.clone()),
                    label: format!("{}: {} − {}", factor.name, factor.levels[i], factor.levels[j]),
                    kind: Kind::Linear { basis: Basis::Mean, coef },
                });
            }
        }
    }
    families.push(("unweighted marginal means", unweighted));
    families.push(("weighted marginal means", weighted));
    families.push(("level differences", differences));

    let mut contrasts = Vec::new();
    for f in 0..k {
        for g in f + 1..k {
            let (af, ag) = (layout.shape[f], layout.shape[g]);
            let per = (n_cells / (af * ag)) as f64;
            let term = format!("{}:{}", layout.factors[f].name, layout.factors[g].name);
            for i in 0..af {
                for i2 in i + 1..af {
                    for j in 0..ag {
                        for j2 in j + 1..ag {
                            let sign = |l: usize, first: usize, second: usize| {
                                if l == first {
                                    1.0
                                } else if l == second {
                                    -1.0
                                } else {
                                    0.0
                                }
                            };
                            let coef: Vec<(usize, f64)> = (0..n_cells)
                                .filter_map(|c| {
                                    let w = sign(levels[c][f], i, i2) * sign(levels[c][g], j, j2);
                                    (w != 0.0).then_some((c, w / per))
                                })
                                .collect();
                            let lv = |x: usize, l: usize| layout.factors[x].levels[l].as_str();
                            contrasts.push(Spec {
                                family: IntervalFamily::InteractionContrast,
                                term: Some(term.clone()),
                                label: format!("({} − {}) × ({} − {})", lv(f, i), lv(f, i2), lv(g, j), lv(g, j2)),
                                kind: Kind::Linear { basis: Basis::Mean, coef },
                            });
                        }
                    }
                }
            }
        }
    }
    families.push(("interaction contrasts", contrasts));

    let mut effects = Vec::new();
    for (t, term) in layout.terms.iter().enumerate() {
        effects.push(Spec {
            family: IntervalFamily::PartialEtaSquared,
            term: Some(term.name.clone()),
            label: term.name.clone(),
            kind: Kind::PartialEta(t),
        });
        effects.push(Spec {
            family: IntervalFamily::PartialOmegaSquared,
            term: Some(term.name.clone()),
            label: term.name.clone(),
            kind: Kind::PartialOmega(t),
        });
        if term.df == 1 {
            effects.push(Spec {
                family: IntervalFamily::RobustD,
                term: Some(term.name.clone()),
                label: term.name.clone(),
                kind: Kind::RobustD(t),
            });
        }
    }
    // Priority when trimming to the limit: effect sizes, cells, marginal means,
    // differences, interaction contrasts (dropped first). Report order puts effect
    // sizes last.
    let limit = MAX_STATISTICS.min((MAX_STORED_DRAWS / resamples.max(1)) as usize);
    let why = |name: &str, count: usize| {
        format!(
            "{name}: {count} more intervals would exceed the limit of {limit} estimates for {resamples} resamples (at most {MAX_STATISTICS} estimates and {MAX_STORED_DRAWS} stored resampled values)"
        )
    };
    let mut omitted = Vec::new();
    let mut budget = limit;
    let effects = if effects.len() <= budget {
        budget -= effects.len();
        effects
    } else {
        omitted.push(why("effect sizes", effects.len()));
        budget = 0;
        Vec::new()
    };
    let mut kept: Vec<Spec> = Vec::new();
    for (name, specs) in families {
        if specs.len() <= budget {
            budget -= specs.len();
            kept.extend(specs);
        } else if !specs.is_empty() {
            omitted.push(why(name, specs.len()));
            budget = 0;
        }
    }
    kept.extend(effects);
    (kept, omitted)
}

/// One cell, prepared for resampling and the jackknife.
#[derive(Debug, Clone)]
struct CellData {
    /// Values minus the cell mean, sorted ascending.
    sorted: Vec<f64>,
    /// Sorted position of the i-th observation in canonical order.
    rank: Vec<u32>,
    /// Values minus the cell mean, canonical order.
    canonical: Vec<f64>,
    /// Prefix sums of `sorted` (length n + 1).
    prefix: Vec<f64>,
    /// Prefix sums of squares of `sorted` (length n + 1).
    prefix2: Vec<f64>,
    /// The cell mean (centred outcome scale).
    centre: f64,
}

impl CellData {
    fn new(values: &[f64]) -> CellData {
        let centre = crate::model::mean_two_pass(values);
        let d: Vec<f64> = values.iter().map(|x| x - centre).collect();
        let mut order: Vec<usize> = (0..d.len()).collect();
        order.sort_by(|&a, &b| d[a].total_cmp(&d[b]));
        let mut rank = vec![0u32; d.len()];
        for (pos, &i) in order.iter().enumerate() {
            rank[i] = pos as u32;
        }
        let sorted: Vec<f64> = order.iter().map(|&i| d[i]).collect();
        let mut prefix = Vec::with_capacity(d.len() + 1);
        let mut prefix2 = Vec::with_capacity(d.len() + 1);
        let (mut s, mut q) = (0.0, 0.0);
        prefix.push(0.0);
        prefix2.push(0.0);
        for x in &sorted {
            s += x;
            q += x * x;
            prefix.push(s);
            prefix2.push(q);
        }
        CellData { sorted, rank, canonical: d, prefix, prefix2, centre }
    }

    /// Trimmed summaries of the sample that holds `counts[k]` copies of `sorted[k]`
    /// (Σ = `sum`, Σ² = `sq` over the whole sample), with the conventions of
    /// [`TrimmedCell::from_sorted`]: only the two trimmed tails are walked (O(γn)), the
    /// kept sums are the totals minus the tails, and x_(g+1), x_(n−g) are found on the way.
    fn trimmed_from_counts(&self, counts: &[u32], sum: f64, sq: f64, gamma: f64) -> TrimmedCell {
        let n = self.n();
        let g = summary::trim_count(gamma, n);
        let h = n.saturating_sub(2 * g);
        let mut cell =
            TrimmedCell { gamma, n, g, h, trimmed_mean: f64::NAN, winsorized_variance: f64::NAN, d: f64::NAN };
        if h == 0 {
            return cell;
        }
        let g32 = g as u32;
        // Lower tail: positions 0..g; `lo` is the value at position g.
        let (mut cum, mut k) = (0u32, 0usize);
        let (mut low_sum, mut low_sq) = (0.0, 0.0);
        while cum + counts[k] <= g32 {
            let (m, x) = (counts[k] as f64, self.sorted[k]);
            low_sum += m * x;
            low_sq += m * x * x;
            cum += counts[k];
            k += 1;
        }
        let lo = self.sorted[k];
        let part = (g32 - cum) as f64;
        low_sum += part * lo;
        low_sq += part * lo * lo;
        // Upper tail: positions n−g..n; `hi` is the value at position n−g−1.
        let (mut cum, mut k) = (0u32, n - 1);
        let (mut up_sum, mut up_sq) = (0.0, 0.0);
        while cum + counts[k] <= g32 {
            let (m, x) = (counts[k] as f64, self.sorted[k]);
            up_sum += m * x;
            up_sq += m * x * x;
            cum += counts[k];
            k -= 1;
        }
        let hi = self.sorted[k];
        let part = (g32 - cum) as f64;
        up_sum += part * hi;
        up_sq += part * hi * hi;
        let kept = sum - low_sum - up_sum;
        cell.trimmed_mean = self.centre + kept / h as f64;
        if n < 2 {
            return cell;
        }
        let var = if lo == hi {
            0.0
        } else {
            let gf = g as f64;
            let w_sum = kept + gf * (lo + hi);
            let w_sq = (sq - low_sq - up_sq) + gf * (lo * lo + hi * hi);
            ((w_sq - w_sum * w_sum / n as f64) / (n - 1) as f64).max(0.0)
        };
        cell.winsorized_variance = var;
        if h >= 2 {
            cell.d = (n - 1) as f64 * var / (h * (h - 1)) as f64;
        }
        cell
    }

    fn n(&self) -> usize {
        self.sorted.len()
    }

    /// Sum of sorted values at positions [a, b) of the sample with position `k` deleted.
    fn loo_sum(&self, k: usize, a: usize, b: usize, prefix: &[f64]) -> f64 {
        let mut s = 0.0;
        let left = b.min(k);
        if a < left {
            s += prefix[left] - prefix[a];
        }
        let from = a.max(k);
        if from < b {
            s += prefix[b + 1] - prefix[from + 1];
        }
        s
    }

    /// Value at position p of the sample with position `k` deleted.
    fn loo_at(&self, k: usize, p: usize) -> f64 {
        self.sorted[if p < k { p } else { p + 1 }]
    }

    /// Trimmed summaries of the cell without the observation at sorted position `k`
    /// (same conventions as [`TrimmedCell::from_sorted`], O(1) from prefix sums).
    fn loo_trimmed(&self, k: usize, gamma: f64) -> TrimmedCell {
        let n = self.n() - 1;
        let g = summary::trim_count(gamma, n);
        let h = n.saturating_sub(2 * g);
        let mut cell =
            TrimmedCell { gamma, n, g, h, trimmed_mean: f64::NAN, winsorized_variance: f64::NAN, d: f64::NAN };
        if h == 0 {
            return cell;
        }
        let kept = self.loo_sum(k, g, n - g, &self.prefix);
        cell.trimmed_mean = self.centre + kept / h as f64;
        if n < 2 {
            return cell;
        }
        let (lo, hi) = (self.loo_at(k, g), self.loo_at(k, n - g - 1));
        let var = if lo == hi {
            0.0
        } else {
            let gf = g as f64;
            let sum = gf * (lo + hi) + kept;
            let sq = gf * (lo * lo + hi * hi) + self.loo_sum(k, g, n - g, &self.prefix2);
            ((sq - sum * sum / n as f64) / (n - 1) as f64).max(0.0)
        };
        cell.winsorized_variance = var;
        if h >= 2 {
            cell.d = (n - 1) as f64 * var / (h * (h - 1)) as f64;
        }
        cell
    }
}

/// Summaries of every cell of one sample (observed, resampled or leave-one-out).
#[derive(Debug, Clone)]
struct CellState {
    mean: Vec<f64>,
    ss: Vec<f64>,
    trimmed: Vec<TrimmedCell>,
}

/// Evaluates every statistic from cell summaries.
struct Evaluator<'a> {
    specs: &'a [Spec],
    forms: &'a SsForms,
    /// L_S of every term (dense).
    wald: Vec<WaldForm>,
    /// Contrast row of each 1-df term (for robust d).
    rows: Vec<Option<Vec<f64>>>,
    n: Vec<usize>,
    n_total: usize,
    grand: f64,
    term_df: Vec<usize>,
    gamma: f64,
    need_trimmed: bool,
    need_ss: bool,
}

/// Reusable buffers for [`Evaluator::evaluate`].
struct EvalScratch {
    sums: Vec<f64>,
    ss_terms: Vec<f64>,
}

impl Evaluator<'_> {
    fn scratch(&self) -> EvalScratch {
        EvalScratch { sums: vec![0.0; self.n.len()], ss_terms: vec![0.0; self.term_df.len()] }
    }

    /// Every statistic of `st` into `out` (NaN where undefined). Allocates nothing.
    fn evaluate(&self, st: &CellState, scratch: &mut EvalScratch, out: &mut [f64]) {
        let mut sse = 0.0;
        if self.need_ss {
            for (c, s) in scratch.sums.iter_mut().enumerate() {
                *s = self.n[c] as f64 * (st.mean[c] - self.grand);
            }
            for (t, ss) in scratch.ss_terms.iter_mut().enumerate() {
                *ss = self.forms.ss(t, &scratch.sums).max(0.0);
            }
            sse = st.ss.iter().sum();
        }
        let n_cells = self.n.len();
        let mse = sse / (self.n_total - n_cells) as f64;
        for (spec, o) in self.specs.iter().zip(out.iter_mut()) {
            *o = match &spec.kind {
                Kind::Linear { basis: Basis::Mean, coef } => coef.iter().map(|&(c, w)| w * st.mean[c]).sum(),
                Kind::Linear { basis: Basis::Trimmed, coef } => {
                    coef.iter().map(|&(c, w)| w * st.trimmed[c].trimmed_mean).sum()
                }
                Kind::Weighted { cells } => {
                    let total: f64 = cells.iter().map(|&c| self.n[c] as f64 * st.mean[c]).sum();
                    total / cells.iter().map(|&c| self.n[c]).sum::<usize>() as f64
                }
                Kind::PartialEta(t) => {
                    let ss = scratch.ss_terms[*t];
                    ss / (ss + sse)
                }
                Kind::PartialOmega(t) => {
                    let ss = scratch.ss_terms[*t];
                    let q = self.term_df[*t] as f64;
                    (ss - q * mse) / (ss + (self.n_total as f64 - q) * mse)
                }
                Kind::RobustD(t) => match &self.rows[*t] {
                    Some(row) => robust::akp_contrast(row, &st.trimmed).unwrap_or(f64::NAN),
                    None => f64::NAN,
                },
            };
        }
    }
}

/// The resampled values of every statistic, before they become intervals.
#[derive(Debug, Clone)]
pub struct Replicates {
    specs: Vec<Spec>,
    /// Estimate of each statistic on the data (centred outcome scale).
    pub estimates: Vec<f64>,
    /// θ*_b of each statistic, in resample order (NaN where undefined).
    pub draws: Vec<Vec<f64>>,
    /// Stratified-jackknife acceleration of each statistic (NaN where undefined).
    pub acceleration: Vec<f64>,
    /// Families left out (size limits).
    pub omitted: Vec<String>,
    location: f64,
    /// Expected partial η² of each term under no effect, q/(q + N − C).
    null_scale: Vec<f64>,
}

impl Replicates {
    /// Index of the statistic with this family and label.
    pub fn find(&self, family: IntervalFamily, label: &str) -> Option<usize> {
        self.specs.iter().position(|s| s.family == family && s.label == label)
    }

    /// Number of statistics.
    pub fn len(&self) -> usize {
        self.specs.len()
    }

    /// True when there are no statistics.
    pub fn is_empty(&self) -> bool {
        self.specs.is_empty()
    }
}

/// Draws `resamples` stratified bootstrap resamples (METHODS §8.1) and computes every
/// statistic on each, plus each statistic's jackknife acceleration (METHODS §8.3).
/// `visibility` decides whether a progress bar may appear (it never changes a number).
///
/// # Errors
/// An internal error when a term's hypothesis covariance is not positive definite
/// (impossible for a complete factorial).
pub fn replicate(
    design: &Design,
    fit: &Fit,
    forms: &SsForms,
    gamma: f64,
    resamples: u64,
    seed: u64,
    visibility: Visibility,
) -> Result<Replicates> {
    let n_cells = design.n_cells();
    let (specs, mut omitted) = if n_cells <= INTERVAL_CELL_LIMIT {
        catalogue(design, resamples)
    } else {
        (
            Vec::new(),
            vec![format!(
                "every interval: the design has {n_cells} cells; bootstrap intervals are computed up to {INTERVAL_CELL_LIMIT} cells"
            )],
        )
    };
    if fit.df_error == 0 {
        omitted.push("effect sizes: no residual degrees of freedom".into());
    }
    let specs: Vec<Spec> = specs
        .into_iter()
        .filter(|s| fit.df_error > 0 || !matches!(s.kind, Kind::PartialEta(_) | Kind::PartialOmega(_)))
        .collect();
    let cells: Vec<CellData> = (0..n_cells).map(|c| CellData::new(design.cell_values(c))).collect();
    let layout = &design.layout;
    let wald: Vec<WaldForm> = (0..layout.terms.len()).map(|t| WaldForm::new(layout, t)).collect();
    let rows: Vec<Option<Vec<f64>>> =
        layout.terms.iter().zip(&wald).map(|(term, w)| (term.df == 1).then(|| w.row(0).to_vec())).collect();
    let need_ss = specs.iter().any(|s| matches!(s.kind, Kind::PartialEta(_) | Kind::PartialOmega(_)));
    let need_trimmed =
        specs.iter().any(|s| matches!(s.kind, Kind::RobustD(_) | Kind::Linear { basis: Basis::Trimmed, .. }));
    let eval = Evaluator {
        specs: &specs,
        forms,
        wald,
        rows,
        n: fit.n.clone(),
        n_total: fit.n_total,
        grand: fit.grand_mean,
        term_df: layout.terms.iter().map(|t| t.df).collect(),
        gamma,
        need_trimmed,
        need_ss,
    };
    let observed = observed_state(&cells, gamma);
    let mut estimates = vec![0.0; specs.len()];
    eval.evaluate(&observed, &mut eval.scratch(), &mut estimates);
    let acceleration = jackknife(&eval, &cells, &observed, &estimates)?;
    // Nothing to resample for when every family was left out.
    let draws = if specs.is_empty() {
        Vec::new()
    } else {
        let progress = Progress::counting("bootstrap intervals", "resamples", resamples, visibility);
        resample_all(&eval, &cells, resamples, seed, &progress)
    };
    let df_e = fit.df_error as f64;
    let null_scale = layout.terms.iter().map(|t| t.df as f64 / (t.df as f64 + df_e)).collect();
    Ok(Replicates { specs, estimates, draws, acceleration, omitted, location: design.location(), null_scale })
}

fn observed_state(cells: &[CellData], gamma: f64) -> CellState {
    let mut st = CellState { mean: Vec::new(), ss: Vec::new(), trimmed: Vec::new() };
    for cd in cells {
        let n = cd.n() as f64;
        let (s, q) = (cd.prefix[cd.n()], cd.prefix2[cd.n()]);
        st.mean.push(cd.centre + s / n);
        st.ss.push((q - s * s / n).max(0.0));
        st.trimmed.push(cd.trimmed_from_counts(&vec![1; cd.n()], s, q, gamma));
    }
    st
}

/// θ* of every statistic for resamples 0..`resamples`, in resample order.
fn resample_all(
    eval: &Evaluator<'_>,
    cells: &[CellData],
    resamples: u64,
    seed: u64,
    progress: &Progress,
) -> Vec<Vec<f64>> {
    let k = eval.specs.len();
    let max_n = cells.iter().map(CellData::n).max().unwrap_or(0);
    let per_chunk = resample::par_chunks(0, resamples, |task| {
        let mut stream = task.stream(seed, Purpose::Bootstrap, 0, 0);
        let mut counts = vec![0u32; max_n];
        let mut st = observed_state(cells, eval.gamma);
        let mut scratch = eval.scratch();
        let mut out = vec![0.0; k * (task.hi - task.lo) as usize];
        for b in task.first..task.hi {
            draw(&mut stream, cells, eval, &mut counts, &mut st);
            if b >= task.lo {
                let at = (b - task.lo) as usize * k;
                eval.evaluate(&st, &mut scratch, &mut out[at..at + k]);
            }
        }
        progress.advance(task.hi - task.lo);
        out
    });
    let mut draws: Vec<Vec<f64>> = (0..k).map(|_| Vec::with_capacity(resamples as usize)).collect();
    for chunk in per_chunk {
        for row in chunk.chunks_exact(k.max(1)) {
            for (d, &v) in draws.iter_mut().zip(row) {
                d.push(v);
            }
        }
    }
    draws
}

/// One stratified resample: per cell, n_c draws of canonical indices j = bounded(n_c)
/// (METHODS §10.3), summed directly for the mean and SS and counted at j's sorted
/// position for the trimmed summaries ([`CellData::trimmed_from_counts`]); summaries
/// into `st`. Allocates nothing.
fn draw(stream: &mut Stream, cells: &[CellData], eval: &Evaluator<'_>, counts: &mut [u32], st: &mut CellState) {
    for (c, cd) in cells.iter().enumerate() {
        let n = cd.n();
        let bound = n as u64;
        let counts = &mut counts[..n];
        let (mut s, mut q) = (0.0, 0.0);
        if eval.need_trimmed {
            counts.fill(0);
            for _ in 0..n {
                let j = stream.bounded(bound) as usize;
                counts[cd.rank[j] as usize] += 1;
                let x = cd.canonical[j];
                s += x;
                q += x * x;
            }
        } else {
            for _ in 0..n {
                let x = cd.canonical[stream.bounded(bound) as usize];
                s += x;
                q += x * x;
            }
        }
        let nf = n as f64;
        st.mean[c] = cd.centre + s / nf;
        st.ss[c] = (q - s * s / nf).max(0.0);
        if eval.need_trimmed {
            st.trimmed[c] = cd.trimmed_from_counts(counts, s, q, eval.gamma);
        }
    }
}

/// What deleting one observation does to its cell.
struct Deletion {
    cell: usize,
    /// The deleted value (centred outcome scale).
    value: f64,
    mean: f64,
    ss: f64,
    trimmed: TrimmedCell,
}

/// The stratified-jackknife acceleration of every statistic (METHODS §8.3), visiting
/// only the statistics each cell affects.
fn jackknife(eval: &Evaluator<'_>, cells: &[CellData], observed: &CellState, estimates: &[f64]) -> Result<Vec<f64>> {
    let n_cells = cells.len();
    let specs = eval.specs;
    // Affected statistics of each cell, with the cell's weight for linear statistics.
    let mut affected: Vec<Vec<(usize, f64)>> = vec![Vec::new(); n_cells];
    for (j, spec) in specs.iter().enumerate() {
        match &spec.kind {
            Kind::Linear { coef, .. } => {
                for &(c, w) in coef {
                    affected[c].push((j, w));
                }
            }
            Kind::Weighted { cells: cs } => {
                for &c in cs {
                    affected[c].push((j, 0.0));
                }
            }
            _ => {
                for a in affected.iter_mut() {
                    a.push((j, 0.0));
                }
            }
        }
    }
    // Rank-one SS updates of every term (only when effect sizes are asked for).
    let projections: Vec<TermProjection> = if eval.need_ss {
        let layout_terms = eval.term_df.len();
        (0..layout_terms)
            .map(|t| {
                TermProjection::new(&eval.wald[t], &eval.n, &observed.mean).ok_or_else(|| {
                    Error::internal(format!("bootstrap intervals: hypothesis covariance of term {t} is singular"))
                })
            })
            .collect::<Result<_>>()?
    } else {
        Vec::new()
    };
    // Weighted marginal means: total and size of each level.
    let weighted: Vec<(f64, usize)> = specs
        .iter()
        .map(|s| match &s.kind {
            Kind::Weighted { cells: cs } => {
                (cs.iter().map(|&c| eval.n[c] as f64 * observed.mean[c]).sum(), cs.iter().map(|&c| eval.n[c]).sum())
            }
            _ => (0.0, 0),
        })
        .collect();
    let sse: f64 = observed.ss.iter().sum();
    let mut acc = vec![Acceleration::new(); specs.len()];
    let mut trimmed_scratch = observed.trimmed.clone();
    for (c, cd) in cells.iter().enumerate() {
        let list = &affected[c];
        if list.is_empty() {
            continue;
        }
        let n = cd.n();
        if n < 2 {
            for &(j, _) in list {
                acc[j].mark_undefined();
            }
            continue;
        }
        let mut vals = vec![0.0; list.len()];
        let mut first = vec![0.0; list.len()];
        let mut m2 = vec![0.0; list.len()];
        let mut m3 = vec![0.0; list.len()];
        let (s, q) = (cd.prefix[n], cd.prefix2[n]);
        let deletion = |k: usize| -> Deletion {
            let x = cd.sorted[k];
            let nf = (n - 1) as f64;
            let (s1, q1) = (s - x, q - x * x);
            Deletion {
                cell: c,
                value: cd.centre + x,
                mean: cd.centre + s1 / nf,
                ss: (q1 - s1 * s1 / nf).max(0.0),
                trimmed: if eval.need_trimmed { cd.loo_trimmed(k, eval.gamma) } else { observed.trimmed[c] },
            }
        };
        for pass in 0..2 {
            for k in 0..n {
                let del = deletion(k);
                loo_values(
                    eval,
                    &del,
                    observed,
                    estimates,
                    list,
                    &projections,
                    &weighted,
                    sse,
                    &mut trimmed_scratch,
                    &mut vals,
                );
                for (a, &v) in vals.iter().enumerate() {
                    let d = v - estimates[list[a].0];
                    if pass == 0 {
                        first[a] += d;
                    } else {
                        let e = d - first[a];
                        m2[a] += e * e;
                        m3[a] += e * e * e;
                    }
                }
            }
            if pass == 0 {
                for f in first.iter_mut() {
                    *f /= n as f64;
                }
            }
        }
        for (a, &(j, _)) in list.iter().enumerate() {
            acc[j].add_central_sums(n, m2[a], m3[a]);
        }
    }
    Ok(acc.iter().map(Acceleration::value).collect())
}

/// The leave-one-out value of every statistic in `list` after `del`.
#[allow(clippy::too_many_arguments)]
fn loo_values(
    eval: &Evaluator<'_>,
    del: &Deletion,
    observed: &CellState,
    estimates: &[f64],
    list: &[(usize, f64)],
    projections: &[TermProjection],
    weighted: &[(f64, usize)],
    sse: f64,
    trimmed_scratch: &mut [TrimmedCell],
    out: &mut [f64],
) {
    let c = del.cell;
    let n_c = eval.n[c];
    let d_mean = del.mean - observed.mean[c];
    let d_trim = del.trimmed.trimmed_mean - observed.trimmed[c].trimmed_mean;
    let sse1 = sse - observed.ss[c] + del.ss;
    let n1 = eval.n_total - 1;
    let df_e = n1 as f64 - eval.n.len() as f64;
    let mse1 = sse1 / df_e;
    let ss_term = |t: usize| projections[t].ss_after_deletion(c, n_c, d_mean);
    trimmed_scratch[c] = del.trimmed;
    for (o, &(j, w)) in out.iter_mut().zip(list) {
        *o = match &eval.specs[j].kind {
            Kind::Linear { basis: Basis::Mean, .. } => estimates[j] + w * d_mean,
            Kind::Linear { basis: Basis::Trimmed, .. } => estimates[j] + w * d_trim,
            Kind::Weighted { .. } => {
                let (total, size) = weighted[j];
                (total - del.value) / (size - 1) as f64
            }
            Kind::PartialEta(t) => {
                let ss = ss_term(*t);
                ss / (ss + sse1)
            }
            Kind::PartialOmega(t) => {
                let ss = ss_term(*t);
                let q = eval.term_df[*t] as f64;
                if df_e > 0.0 {
                    (ss - q * mse1) / (ss + (n1 as f64 - q) * mse1)
                } else {
                    f64::NAN
                }
            }
            Kind::RobustD(t) => match &eval.rows[*t] {
                Some(row) => robust::akp_contrast(row, trimmed_scratch).unwrap_or(f64::NAN),
                None => f64::NAN,
            },
        };
    }
    trimmed_scratch[c] = observed.trimmed[c];
}

/// Intervals of every statistic at `level` (percentile and BCa, with Monte Carlo errors
/// of the ends), in outcome units for location estimates. Flags: `undefined-resamples`
/// (some θ* do not exist; the interval uses the rest), `degenerate` (all θ* equal),
/// `bca-undefined` (percentile only), `near-bound` (a partial η² or ω² whose lower
/// percentile end is below twice the null expectation q/(q + N − C) of partial η²:
/// the bounded parameter makes the interval unreliable there, METHODS §8.5).
pub fn summarise(rep: &Replicates, level: f64) -> Vec<BootstrapInterval> {
    (0..rep.specs.len())
        .into_par_iter()
        .map(|j| {
            let spec = &rep.specs[j];
            let shift = if spec.is_location() { rep.location } else { 0.0 };
            let draws = &rep.draws[j];
            let estimate = rep.estimates[j];
            let mut flags = Vec::new();
            let finite_draws: Vec<f64> = draws.iter().copied().filter(|x| x.is_finite()).collect();
            let used = finite_draws.len();
            if used < draws.len() {
                flags.push("undefined-resamples".to_string());
            }
            let (bias, se) = if used >= 2 {
                let m = finite_draws.iter().sum::<f64>() / used as f64;
                let v = finite_draws.iter().map(|x| (x - m) * (x - m)).sum::<f64>() / (used - 1) as f64;
                (m - estimate, v.sqrt())
            } else {
                (f64::NAN, f64::NAN)
            };
            let mut sorted = finite_draws;
            sorted.sort_unstable_by(f64::total_cmp);
            let ends = |e: Ends| IntervalEnds {
                low: finite(e.low.value + shift),
                high: finite(e.high.value + shift),
                low_mc_se: finite(e.low.mc_se),
                high_mc_se: finite(e.high.mc_se),
            };
            let pct = interval::percentile(&sorted, level);
            let bca = if estimate.is_finite() {
                interval::bca(&sorted, estimate, rep.acceleration[j], level)
            } else {
                Err(IntervalProblem::BiasUndefined)
            };
            if matches!(pct, Err(IntervalProblem::Degenerate)) {
                flags.push("degenerate".to_string());
            }
            let bca_problem = bca.as_ref().err().map(|p| p.describe().to_string());
            if bca.is_err() {
                flags.push("bca-undefined".to_string());
            }
            if matches!(spec.family, IntervalFamily::PartialEtaSquared | IntervalFamily::PartialOmegaSquared) {
                let bound = spec.kind.effect_term().map(|t| 2.0 * rep.null_scale[t]);
                let low = pct.as_ref().ok().map(|e| e.low.value);
                if let (Some(b), Some(l)) = (bound, low) {
                    if l < b {
                        flags.push("near-bound".to_string());
                    }
                }
            }
            BootstrapInterval {
                family: spec.family,
                term: spec.term.clone(),
                label: spec.label.clone(),
                estimate: finite(estimate + shift),
                bias: finite(bias),
                se: finite(se),
                percentile: pct.ok().map(ends),
                bca: bca.as_ref().ok().map(|b| ends(b.ends)),
                bca_problem,
                z0: bca.as_ref().ok().and_then(|b| finite(b.z0)),
                acceleration: finite(rep.acceleration[j]),
                resamples_used: used as u64,
                flags,
            }
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::config::SsType;
    use crate::design::Factor;
    use crate::resample::StreamKey;

    fn factor(name: &str, a: usize) -> Factor {
        Factor {
            name: name.into(),
            levels: (1..=a).map(|i| format!("{}{i}", name.to_lowercase())).collect(),
            measured: false,
        }
    }

    /// METHODS §12.0 cells (invented data) with a tie added to the last cell.
    fn cells() -> Vec<Vec<f64>> {
        vec![
            vec![9.6, 10.2, 9.9, 10.0, 9.2],
            vec![9.1, 9.8, 11.3, 9.7, 9.8, 12.1, 10.7],
            vec![11.9, 12.0, 13.5, 15.0, 13.2, 16.2],
            vec![13.8, 9.6, 9.4, 9.9, 9.2, 10.1, 9.8, 9.9],
            vec![10.9, 11.6, 14.8, 14.9, 10.3, 12.6],
            vec![13.4, 14.9, 18.5, 19.2, 12.1, 14.9, 17.6],
        ]
    }

    fn design(cells: &[Vec<f64>]) -> Design {
        Design::from_cells("y", vec![factor("A", 2), factor("B", 3)], cells).unwrap()
    }

    fn close(a: f64, b: f64, rel: f64) -> bool {
        (a - b).abs() <= rel * b.abs().max(1e-12) || (a.is_nan() && b.is_nan())
    }

    #[test]
    fn leave_one_out_trimmed_summaries_match_a_full_recompute() {
        // Property: the O(1) prefix-sum version equals TrimmedCell::from_sorted on the
        // sample without that observation (ties included).
        let values = [3.0, 1.0, 4.0, 1.0, 5.0, 9.0, 2.0, 6.0, 5.0, 3.0, 5.0];
        let cd = CellData::new(&values);
        for gamma in [0.0, 0.1, 0.2, 0.3, 0.45] {
            for k in 0..values.len() {
                let fast = cd.loo_trimmed(k, gamma);
                let rest: Vec<f64> = cd.sorted.iter().enumerate().filter(|&(i, _)| i != k).map(|(_, x)| *x).collect();
                let slow = TrimmedCell::from_sorted(&rest, gamma);
                assert_eq!((fast.g, fast.h, fast.n), (slow.g, slow.h, slow.n));
                assert!(close(fast.trimmed_mean, cd.centre + slow.trimmed_mean, 1e-13), "γ {gamma} k {k}");
                assert!(close(fast.winsorized_variance, slow.winsorized_variance, 1e-12), "γ {gamma} k {k}");
                assert!(close(fast.d, slow.d, 1e-12));
            }
        }
    }

    #[test]
    fn counted_resample_equals_sorting_the_canonical_draw() {
        // Property: counting canonical indices at their sorted positions gives the same
        // multiset as drawing y_c,j in canonical order and sorting (METHODS §10.3).
        let d = design(&cells());
        let fit = Fit::new(&d);
        let forms = SsForms::new(&d.layout, &fit.n, SsType::Three).unwrap();
        let cds: Vec<CellData> = (0..6).map(|c| CellData::new(d.cell_values(c))).collect();
        let specs = catalogue(&d, 1999).0;
        for gamma in [0.0, 0.1, 0.2, 0.3, 0.45] {
            let eval = Evaluator {
                specs: &specs,
                forms: &forms,
                wald: Vec::new(),
                rows: vec![None; 3],
                n: fit.n.clone(),
                n_total: fit.n_total,
                grand: fit.grand_mean,
                term_df: vec![1, 2, 2],
                gamma,
                need_trimmed: true,
                need_ss: false,
            };
            let key = StreamKey { purpose: Purpose::Bootstrap, term: 0, chunk: 3, aux: 0 };
            let mut a = Stream::new(5, key);
            let mut b = Stream::new(5, key);
            let mut st = observed_state(&cds, gamma);
            let mut counts = vec![0u32; 8];
            for _ in 0..50 {
                draw(&mut a, &cds, &eval, &mut counts, &mut st);
                for c in 0..6 {
                    let v = d.cell_values(c);
                    let mut s: Vec<f64> = (0..v.len()).map(|_| v[b.bounded(v.len() as u64) as usize]).collect();
                    let mean = s.iter().sum::<f64>() / s.len() as f64;
                    s.sort_by(f64::total_cmp);
                    let t = TrimmedCell::from_sorted(&s, gamma);
                    let got = st.trimmed[c];
                    assert!(close(st.mean[c], mean, 1e-13));
                    assert!(close(got.trimmed_mean, t.trimmed_mean, 1e-13), "γ {gamma}");
                    assert!(close(got.winsorized_variance, t.winsorized_variance, 1e-11), "γ {gamma}");
                    assert!(close(got.d, t.d, 1e-11));
                    assert_eq!((got.g, got.h), (t.g, t.h));
                    assert_eq!(got.winsorized_variance == 0.0, t.winsorized_variance == 0.0);
                    let ss: f64 = s.iter().map(|x| (x - mean) * (x - mean)).sum();
                    assert!((st.ss[c] - ss).abs() < 1e-10);
                }
            }
        }
    }

    #[test]
    fn fast_jackknife_equals_deleting_each_observation_and_recomputing() {
        // Property: the acceleration from O(1) updates equals the stratified jackknife
        // computed by rebuilding the design without each observation in turn.
        let cells = cells();
        let d = design(&cells);
        let fit = Fit::new(&d);
        let forms = SsForms::new(&d.layout, &fit.n, SsType::Three).unwrap();
        let rep = replicate(&d, &fit, &forms, 0.2, 0, 1, Visibility::Hidden).unwrap();
        let mut acc = vec![Acceleration::new(); rep.len()];
        for c in 0..cells.len() {
            let mut loo: Vec<Vec<f64>> = vec![Vec::new(); rep.len()];
            for i in 0..cells[c].len() {
                let mut smaller = cells.clone();
                smaller[c].remove(i);
                let d1 = design(&smaller);
                let f1 = Fit::new(&d1);
                let forms1 = SsForms::new(&d1.layout, &f1.n, SsType::Three).unwrap();
                let r1 = replicate(&d1, &f1, &forms1, 0.2, 0, 1, Visibility::Hidden).unwrap();
                for (j, v) in r1.estimates.iter().enumerate() {
                    loo[j].push(*v);
                }
            }
            for (j, values) in loo.iter().enumerate() {
                acc[j].add_stratum(values);
            }
        }
        for (j, a) in acc.iter().enumerate() {
            let (fast, slow) = (rep.acceleration[j], a.value());
            assert!(
                (fast - slow).abs() <= 1e-9 * slow.abs() + 1e-12,
                "{:?} {}: fast {fast} slow {slow}",
                rep.specs[j].family,
                rep.specs[j].label
            );
        }
    }

    #[test]
    fn many_resamples_drop_families_and_say_so() {
        // 36 estimates; with 2²⁵/10⁶ = 33 places the interaction contrasts (3) go first.
        let (specs, omitted) = catalogue(&design(&cells()), 1_000_000);
        assert_eq!(specs.len(), 33);
        assert!(omitted.len() == 1 && omitted[0].starts_with("interaction contrasts: 3 more"), "{omitted:?}");
        assert!(specs.iter().any(|s| s.family == IntervalFamily::RobustD));
        let (specs, omitted) = catalogue(&design(&cells()), 1 << 40);
        assert!(specs.is_empty() && omitted[0].starts_with("effect sizes"), "{omitted:?}");
    }

    #[test]
    fn catalogue_of_a_2x3_design_lists_every_family() {
        let (specs, omitted) = catalogue(&design(&cells()), 1999);
        assert!(omitted.is_empty());
        let count = |f: IntervalFamily| specs.iter().filter(|s| s.family == f).count();
        assert_eq!(count(IntervalFamily::CellMean), 6);
        assert_eq!(count(IntervalFamily::CellTrimmedMean), 6);
        assert_eq!(count(IntervalFamily::MarginalMeanUnweighted), 5);
        assert_eq!(count(IntervalFamily::MarginalMeanWeighted), 5);
        assert_eq!(count(IntervalFamily::LevelDifference), 1 + 3);
        assert_eq!(count(IntervalFamily::InteractionContrast), 3);
        assert_eq!(count(IntervalFamily::PartialEtaSquared), 3);
        assert_eq!(count(IntervalFamily::PartialOmegaSquared), 3);
        assert_eq!(count(IntervalFamily::RobustD), 1);
    }
}
