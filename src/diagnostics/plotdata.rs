//! The numbers behind the report's plots, computed once in the library so that the
//! renderers (`report::plots`, `report::html`) only draw and never compute statistics.
//!
//! [`PlotData`] holds, per cell, the type-7 quartiles and median, Tukey's whisker ends
//! and the points (value, residual, standardized residual, input line, and whether the
//! point lies beyond the 1.5 × IQR or 3 × IQR fences of its cell, the rules of
//! [`super::outliers`]); the residual normal Q-Q positions; the cell means the
//! interaction plot draws, laid out for the chosen axis and series; and, where the
//! permutation engines ran, each term's null distribution binned for a histogram with
//! the share a large-sample reference distribution puts in each bin.
//!
//! It is part of [`crate::results::Analysis`] but not of `results.json`: it repeats the
//! data row by row, which the results contract does not (and which would dwarf it for
//! large inputs). The plots in the report folder are its published form.
//!
//! Large inputs are thinned deterministically (no random draws): a cell keeps every
//! point beyond its 1.5 × IQR fences and at most [`STRIP_POINTS_MAX`] of the others,
//! at evenly spaced ranks; the Q-Q plot keeps the [`QQ_TAIL_KEEP`] most extreme points
//! at each end and evenly spaced ranks in between, [`QQ_POINTS_MAX`] in all. Every
//! thinned set says how many points it stands for.

use crate::config::PlotAxes;
use crate::design::Design;
use crate::dist;
use crate::error::{Error, Result};
use crate::model::Fit;
use crate::results::{finite, CellSummary, Details, EngineResult, NullDistribution};
use crate::summary;

use super::outliers::{TUKEY_FAR, TUKEY_OUTSIDE};

/// Most points drawn per cell among those inside the 1.5 × IQR fences (all points
/// beyond the fences are always kept).
pub const STRIP_POINTS_MAX: usize = 300;
/// Most points of the residual Q-Q plot.
pub const QQ_POINTS_MAX: usize = 2000;
/// Points kept at each end of a thinned Q-Q plot.
pub const QQ_TAIL_KEEP: usize = 50;
/// Most panels of an interaction plot; beyond this the plot averages over the
/// remaining factors.
pub const MAX_PANELS: usize = 12;
/// Bins of a null-distribution histogram.
pub const NULL_BINS: usize = 40;
/// The histogram's range ends at this quantile of the null distribution (or at the
/// observed statistic when that is not far beyond).
pub const NULL_RANGE_QUANTILE: f64 = 0.995;
/// An observed statistic beyond this multiple of the range end is drawn as off scale.
pub const NULL_OFF_SCALE: f64 = 1.5;

/// The plotting positions of the Q-Q plot, stated in the report.
pub const QQ_POSITIONS: &str = "Blom (1958): Φ⁻¹((i − 3/8)/(n + 1/4)), i = 1..n";

/// Where a point lies relative to Tukey's fences of its cell (type-7 quartiles).
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord)]
pub enum PointKind {
    /// Within 1.5 × IQR of the quartiles.
    Inside,
    /// Beyond 1.5 × IQR but within 3 × IQR ("outside").
    Outside,
    /// Beyond 3 × IQR ("far out"): what the default sensitivity variant removes.
    FarOut,
}

/// One observation as the plots draw it.
#[derive(Debug, Clone, PartialEq)]
pub struct PlotPoint {
    /// The value (outcome units).
    pub value: f64,
    /// Residual y − ȳ_c (outcome units).
    pub residual: f64,
    /// Internally standardized residual e/√(MSE·(1 − 1/n_c)); `None` for n_c = 1 or MSE = 0.
    pub standardized: Option<f64>,
    /// 1-based input line.
    pub line: u64,
    /// Position relative to the cell's fences.
    pub kind: PointKind,
}

/// Box, whiskers and points of one cell.
#[derive(Debug, Clone, PartialEq)]
pub struct CellPlot {
    /// Level label of each factor.
    pub levels: Vec<String>,
    /// `A=a1, B=b2`.
    pub name: String,
    /// Observations in the cell.
    pub n: usize,
    /// Cell mean (the fitted value of every observation in the cell).
    pub mean: f64,
    /// First quartile (type 7, as the diagnostics).
    pub q1: f64,
    /// Median.
    pub median: f64,
    /// Third quartile (type 7).
    pub q3: f64,
    /// Smallest value at or above Q1 − 1.5·IQR (Tukey's lower whisker end).
    pub whisker_low: f64,
    /// Largest value at or below Q3 + 1.5·IQR.
    pub whisker_high: f64,
    /// The points drawn, in input order (all of them unless the cell was thinned).
    pub points: Vec<PlotPoint>,
}

/// One point of the residual normal Q-Q plot.
#[derive(Debug, Clone, PartialEq)]
pub struct QqPoint {
    /// Normal quantile at the point's plotting position ([`QQ_POSITIONS`]).
    pub theoretical: f64,
    /// Standardized residual (sorted ascending over the plot).
    pub standardized: f64,
    /// 1-based input line.
    pub line: u64,
    /// Position relative to the fences of the point's cell.
    pub kind: PointKind,
}

/// The residual normal Q-Q plot.
#[derive(Debug, Clone, PartialEq)]
pub struct QqPlot {
    /// Points drawn (all, or a thinned set of the n ordered residuals).
    pub points: Vec<QqPoint>,
    /// Standardized residuals behind the plot.
    pub n: usize,
    /// Observations left out (cells with one observation have no residual).
    pub excluded: usize,
}

/// One mean of the interaction plot.
#[derive(Debug, Clone, PartialEq)]
pub struct InteractionMean {
    /// Level index of the axis factor.
    pub axis_level: usize,
    /// Level index of the series factor (0 with one factor).
    pub series_level: usize,
    /// Mean (outcome units).
    pub mean: f64,
    /// Interval (outcome units); `None` where there is none (n = 1, no residual df).
    pub low: Option<f64>,
    /// Upper end.
    pub high: Option<f64>,
    /// Observations behind the mean.
    pub n: usize,
}

/// One panel of the interaction plot: the cells at one level combination of the
/// panel factors.
#[derive(Debug, Clone, PartialEq)]
pub struct InteractionPanel {
    /// `(factor name, level label)` of each panel factor; empty for a single panel.
    pub at: Vec<(String, String)>,
    /// Means in axis-major order.
    pub means: Vec<InteractionMean>,
}

/// The interaction plot's layout and means.
#[derive(Debug, Clone, PartialEq)]
pub struct Interaction {
    /// Factor index on the x axis.
    pub axis: usize,
    /// Factor index drawn as lines (`None` with one factor).
    pub series: Option<usize>,
    /// Factors that split the plot into panels (empty when averaged or with ≤ 2 factors).
    pub panel_factors: Vec<usize>,
    /// Factors the means are averaged over (when there would be more than
    /// [`MAX_PANELS`] panels).
    pub averaged_over: Vec<usize>,
    /// The panels.
    pub panels: Vec<InteractionPanel>,
    /// What the intervals are, in words.
    pub interval: String,
}

/// One bin of a null-distribution histogram.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct NullBin {
    /// Lower edge.
    pub low: f64,
    /// Upper edge.
    pub high: f64,
    /// Share of the resampled statistics in the bin.
    pub share: f64,
    /// Share the large-sample reference distribution puts in the bin.
    pub reference: Option<f64>,
}

/// A term's permutation null distribution, binned.
#[derive(Debug, Clone, PartialEq)]
pub struct NullHistogram {
    /// Engine id.
    pub engine: String,
    /// Term id.
    pub term: String,
    /// `F` or `W`.
    pub statistic: String,
    /// Observed statistic.
    pub observed: Option<f64>,
    /// The engine's p-value.
    pub p: Option<f64>,
    /// Resampled (or enumerated) statistics.
    pub resamples: u64,
    /// All rearrangements were enumerated.
    pub exact: bool,
    /// Equal-width bins from the lower end of the distribution to the range end.
    pub bins: Vec<NullBin>,
    /// Share of the resampled statistics beyond the last bin (including infinite ones).
    pub beyond: f64,
    /// The observed statistic lies beyond [`NULL_OFF_SCALE`] × the range end.
    pub observed_off_scale: bool,
    /// The reference distribution, e.g. `F(2, 54)` or `χ²(2)`.
    pub reference: Option<String>,
}

/// Everything the plots draw.
#[derive(Debug, Clone, PartialEq)]
pub struct PlotData {
    /// Outcome column.
    pub outcome: String,
    /// Factor names, in `--factors` order.
    pub factors: Vec<String>,
    /// One entry per cell, cell order.
    pub cells: Vec<CellPlot>,
    /// The residual Q-Q plot; `None` without residual variance.
    pub qq: Option<QqPlot>,
    /// The interaction plot.
    pub interaction: Interaction,
    /// Null distributions of the permutation engines, engine then term order.
    pub nulls: Vec<NullHistogram>,
}

/// The interaction plot's factors, resolved against the design.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct InteractionAxes {
    /// Factor index on the x axis.
    pub axis: usize,
    /// Factor index drawn as lines (`None` with one factor).
    pub series: Option<usize>,
}

impl InteractionAxes {
    /// Resolves `--axis`/`--series`. Defaults: the axis is the factor with the most
    /// levels (the first of them on a tie), so that fewer lines cross; the series is the
    /// first other factor in `--factors` order (with `--series` given alone, the axis is
    /// the factor with most levels among the others).
    ///
    /// # Errors
    /// A usage error (exit 2) for a name that is not a factor, or the same factor twice.
    pub fn resolve(design: &Design, choice: &PlotAxes) -> Result<InteractionAxes> {
        let factors = design.factors();
        let names: Vec<&str> = factors.iter().map(|f| f.name.as_str()).collect();
        let find = |flag: &str, name: &Option<String>| -> Result<Option<usize>> {
            match name {
                None => Ok(None),
                Some(n) => names.iter().position(|f| f == n).map(Some).ok_or_else(|| {
                    Error::usage(
                        format!("{flag} `{n}` is not one of the factors"),
                        format!("the factors are {}", names.join(", ")),
                    )
                }),
            }
        };
        let axis = find("--axis", &choice.axis)?;
        let series = find("--series", &choice.series)?;
        if axis.is_some() && axis == series {
            return Err(Error::usage(
                "--axis and --series name the same factor",
                "put one factor on the x axis and another on the lines",
            ));
        }
        if names.len() == 1 {
            return Ok(InteractionAxes { axis: 0, series: None });
        }
        let most_levels = |skip: Option<usize>| {
            (0..factors.len())
                .filter(|&f| Some(f) != skip)
                .fold(None, |best: Option<usize>, f| match best {
                    Some(b) if factors[b].levels.len() >= factors[f].levels.len() => Some(b),
                    _ => Some(f),
                })
                .unwrap_or(0)
        };
        let axis = axis.unwrap_or_else(|| most_levels(series));
        let series = series.unwrap_or_else(|| (0..factors.len()).find(|&f| f != axis).unwrap_or(0));
        Ok(InteractionAxes { axis, series: Some(series) })
    }
}

/// Computes the plot data.
///
/// * Quartiles: type 7 ([`summary::quantile_type7`], as the diagnostics); whiskers end at
///   the most extreme values within Q1 − 1.5·IQR and Q3 + 1.5·IQR (Tukey 1977).
/// * Standardized residuals: r_i = e_i/√(MSE·(1 − h_ii)) with leverage h_ii = 1/n_c in
///   the cell-means model (the internally studentized residual; Cook & Weisberg 1982).
/// * Q-Q positions: [`QQ_POSITIONS`] (Blom 1958) over the n standardized residuals.
/// * Interaction means: with at most [`MAX_PANELS`] panels, the cell means with the
///   cell table's intervals (`cells[c].mean_ci`: t interval from the cell's own sd);
///   beyond, unweighted means over the other factors' cells with pooled-error t
///   intervals, SE = √(MSE·Σ 1/n_c)/m, df N − C (the marginal-means formula).
/// * Null histograms: the type-7 quantile function of [`NullDistribution`] inverted by
///   linear interpolation gives the share of resamples in each bin; the reference share
///   is F(df1, df2) (statistic F) or χ²(df1) (statistic W) between the bin edges.
pub fn compute(
    design: &Design,
    fit: &Fit,
    cells: &[CellSummary],
    axes: InteractionAxes,
    ci_level: f64,
    engines: &[EngineResult],
) -> PlotData {
    assemble(design, fit, cells, axes, ci_level, engines, residual_plots(design, fit))
}

/// The per-cell box-and-strip plots and the Q-Q plot: the part of [`compute`] that reads
/// every observation and needs neither the cell table nor the engines, so that it can
/// run beside the diagnostics.
pub fn residual_plots(design: &Design, fit: &Fit) -> (Vec<CellPlot>, Option<QqPlot>) {
    let loc = design.location();
    let lines = design.lines();
    let mse = fit.mse();
    let mut cell_plots = Vec::with_capacity(design.n_cells());
    let mut runs: Vec<QqRun> = Vec::with_capacity(design.n_cells());
    for c in 0..design.n_cells() {
        let v = design.cell_values(c);
        let start = design.cell_range(c).start;
        let n = v.len();
        let s = design.sorted_cell(c);
        let (q1, median, q3) =
            (summary::quantile_type7(s, 0.25), summary::quantile_type7(s, 0.5), summary::quantile_type7(s, 0.75));
        let iqr = q3 - q1;
        let (in_lo, in_hi) = (q1 - TUKEY_OUTSIDE * iqr, q3 + TUKEY_OUTSIDE * iqr);
        let (far_lo, far_hi) = (q1 - TUKEY_FAR * iqr, q3 + TUKEY_FAR * iqr);
        let whisker_low = s.iter().copied().find(|&x| x >= in_lo).unwrap_or(q1);
        let whisker_high = s.iter().rev().copied().find(|&x| x <= in_hi).unwrap_or(q3);
        let m = fit.mean[c];
        let scale = if n >= 2 && mse > 0.0 { (mse * (1.0 - 1.0 / n as f64)).sqrt() } else { f64::NAN };
        let fences = Fences { in_lo, in_hi, far_lo, far_hi };
        let kind_of = |x: f64| fences.kind(x);
        let standardized = |x: f64| finite((x - m) / scale);
        let order = design.sorted_positions(c);
        // The finite standardized residuals of a sorted cell are a contiguous range.
        let lo = s.iter().position(|&x| standardized(x).is_some()).unwrap_or(n);
        let hi = n - s.iter().rev().position(|&x| standardized(x).is_some()).unwrap_or(0).min(n - lo);
        runs.push(QqRun { sorted: s, order, lines: &lines[start..start + n], mean: m, scale, fences, lo, hi });
        let points: Vec<PlotPoint> = strip_positions(s, order, &fences)
            .into_iter()
            .map(|i| PlotPoint {
                value: loc + v[i],
                residual: v[i] - m,
                standardized: standardized(v[i]),
                line: lines[start + i],
                kind: kind_of(v[i]),
            })
            .collect();
        cell_plots.push(CellPlot {
            levels: design.layout.cell_labels(c),
            name: design.layout.cell_name(c),
            n,
            mean: loc + m,
            q1: loc + q1,
            median: loc + median,
            q3: loc + q3,
            whisker_low: loc + whisker_low,
            whisker_high: loc + whisker_high,
            points,
        });
    }
    (cell_plots, qq_plot(&runs))
}

/// [`compute`] from the parts of [`residual_plots`].
pub fn assemble(
    design: &Design,
    fit: &Fit,
    cells: &[CellSummary],
    axes: InteractionAxes,
    ci_level: f64,
    engines: &[EngineResult],
    (cell_plots, qq): (Vec<CellPlot>, Option<QqPlot>),
) -> PlotData {
    PlotData {
        outcome: design.outcome.clone(),
        factors: design.factors().iter().map(|f| f.name.clone()).collect(),
        cells: cell_plots,
        qq,
        interaction: interaction(design, fit, cells, axes, ci_level),
        nulls: null_histograms(engines),
    }
}

/// Positions (input order) of the strip-plot points of a cell: every point beyond the
/// inner fences, and at most [`STRIP_POINTS_MAX`] of the rest at evenly spaced ranks of
/// value (`sorted`: the cell's values ascending; `order`: their positions in the cell,
/// ties in input order). The points inside the fences are a contiguous range of the
/// sorted values, found by bisection.
fn strip_positions(sorted: &[f64], order: &[usize], fences: &Fences) -> Vec<usize> {
    let a = sorted.partition_point(|&x| x < fences.in_lo);
    // As `Fences::kind`: a NaN fence leaves every point inside.
    let b = a + sorted[a..].partition_point(|&x| x <= fences.in_hi || fences.in_hi.is_nan());
    if b - a <= STRIP_POINTS_MAX {
        return (0..sorted.len()).collect();
    }
    let mut kept: Vec<usize> = order[..a].iter().chain(&order[b..]).copied().collect();
    kept.extend(even_ranks(b - a, STRIP_POINTS_MAX).map(|k| order[a + k]));
    kept.sort_unstable();
    kept.dedup();
    kept
}

/// `m` ranks in 0..n, evenly spaced and including both ends (m ≥ 2, m ≤ n).
fn even_ranks(n: usize, m: usize) -> impl Iterator<Item = usize> {
    (0..m).map(move |k| ((k as f64) * (n - 1) as f64 / (m - 1) as f64).round() as usize)
}

/// Tukey's fences of a cell.
#[derive(Debug, Clone, Copy)]
struct Fences {
    in_lo: f64,
    in_hi: f64,
    far_lo: f64,
    far_hi: f64,
}

impl Fences {
    fn kind(&self, x: f64) -> PointKind {
        if x < self.far_lo || x > self.far_hi {
            PointKind::FarOut
        } else if x < self.in_lo || x > self.in_hi {
            PointKind::Outside
        } else {
            PointKind::Inside
        }
    }
}

/// One cell's standardized residuals (x − ȳ_c)/√(MSE·(1 − 1/n_c)) on its sorted
/// values: finite at sorted positions `lo..hi` (a contiguous range, as the values are
/// sorted), non-decreasing there.
struct QqRun<'a> {
    /// The cell's values in ascending order, and their positions in the cell.
    sorted: &'a [f64],
    order: &'a [usize],
    /// The cell's lines, in input order.
    lines: &'a [u64],
    mean: f64,
    scale: f64,
    fences: Fences,
    lo: usize,
    hi: usize,
}

impl QqRun<'_> {
    fn value(&self, k: usize) -> f64 {
        (self.sorted[k] - self.mean) / self.scale
    }

    fn line(&self, k: usize) -> u64 {
        self.lines[self.order[k]]
    }
}

/// Every finite standardized residual as one sort key: the top bits of its
/// [`summary::total_order_key`] with the cell number in the low `tag_bits` bits, in
/// ascending order. Truncating the key keeps the order of unequal truncated keys, so
/// points whose truncated keys differ are in value order, and points with one
/// truncated key are neighbours ([`qq_plot`] puts each such span in exact order). Each
/// cell's keys ascend already, so ordering them is merging the cells' runs.
fn qq_keys(runs: &[QqRun], tag_bits: u32) -> Vec<u64> {
    let mut keys: Vec<u64> = Vec::with_capacity(runs.iter().map(|r| r.hi - r.lo).sum());
    let mut bounds = vec![0];
    for (c, r) in runs.iter().enumerate() {
        keys.extend((r.lo..r.hi).map(|k| (summary::total_order_key(r.value(k)) >> tag_bits << tag_bits) | c as u64));
        bounds.push(keys.len());
    }
    summary::merge_sorted_runs(keys, &bounds, |&k| k)
}

/// The Q-Q plot of the pooled standardized residuals, in ascending order of (value,
/// line) — the order of sorting every point — keeping only the plotted ranks.
///
/// [`qq_keys`] orders the points up to spans of equal truncated keys. A cell's k-th
/// point in that sequence is its k-th finite residual, so a position's point is found
/// by counting; a span (equal or nearly equal values, possibly from several cells) is
/// put in exact (value, line) order only where a plotted rank falls in it.
fn qq_plot(runs: &[QqRun]) -> Option<QqPlot> {
    let total: usize = runs.iter().map(|r| r.sorted.len()).sum();
    let tag_bits = usize::BITS - runs.len().saturating_sub(1).leading_zeros();
    let keys = qq_keys(runs, tag_bits);
    let n = keys.len();
    if n < 2 {
        return None;
    }
    let cell_of = |i: usize| (keys[i] & ((1u64 << tag_bits) - 1)) as usize;
    let span_of = |i: usize| keys[i] >> tag_bits;
    let position = |i: usize| dist::normal_quantile((i as f64 + 1.0 - 0.375) / (n as f64 + 0.25));
    let ranks: Vec<usize> = if n <= QQ_POINTS_MAX {
        (0..n).collect()
    } else {
        let middle = QQ_POINTS_MAX - 2 * QQ_TAIL_KEEP;
        let mut r: Vec<usize> = (0..QQ_TAIL_KEEP).collect();
        let inner = n - 2 * QQ_TAIL_KEEP;
        r.extend(even_ranks(inner, middle).map(|k| QQ_TAIL_KEEP + k));
        r.extend(n - QQ_TAIL_KEEP..n);
        r.dedup();
        r
    };
    // next[c]: sorted position in cell c of the point at sequence position `at`.
    let mut next: Vec<usize> = runs.iter().map(|r| r.lo).collect();
    let mut at = 0;
    // Scratch for walking out from `at`: how many of each cell were stepped over.
    let mut stepped: Vec<usize> = vec![0; runs.len()];
    let mut touched: Vec<usize> = Vec::new();
    // The current span: its first position and its points as (value key, line, cell,
    // sorted position) in exact order.
    let mut span_start = 0;
    let mut span: Vec<(u64, u64, usize, usize)> = Vec::new();
    let mut points = Vec::with_capacity(ranks.len());
    for &rank in &ranks {
        if rank >= span_start + span.len() {
            while at < rank {
                next[cell_of(at)] += 1;
                at += 1;
            }
            let point = |c: usize, k: usize| {
                let run = &runs[c];
                (summary::total_order_key(run.value(k)), run.line(k), c, k)
            };
            let here = span_of(at);
            span.clear();
            // Back from `at` while the truncated keys are equal, then forward from it.
            let mut start = at;
            while start > 0 && span_of(start - 1) == here {
                let c = cell_of(start - 1);
                stepped[c] += 1;
                touched.push(c);
                span.push(point(c, next[c] - stepped[c]));
                start -= 1;
            }
            for c in touched.drain(..) {
                stepped[c] = 0;
            }
            let mut end = at;
            while end < n && span_of(end) == here {
                let c = cell_of(end);
                span.push(point(c, next[c] + stepped[c]));
                stepped[c] += 1;
                touched.push(c);
                end += 1;
            }
            for c in touched.drain(..) {
                stepped[c] = 0;
            }
            span.sort_unstable_by_key(|p| (p.0, p.1));
            span_start = start;
        }
        let (_, line, c, k) = span[rank - span_start];
        let run = &runs[c];
        points.push(QqPoint {
            theoretical: position(rank),
            standardized: run.value(k),
            line,
            kind: run.fences.kind(run.sorted[k]),
        });
    }
    Some(QqPlot { points, n, excluded: total - n })
}

fn interaction(design: &Design, fit: &Fit, cells: &[CellSummary], axes: InteractionAxes, ci_level: f64) -> Interaction {
    let layout = &design.layout;
    let k = layout.factors.len();
    let others: Vec<usize> = (0..k).filter(|&f| f != axes.axis && Some(f) != axes.series).collect();
    let panel_count: usize = others.iter().map(|&f| layout.shape[f]).product();
    let series_levels = axes.series.map(|s| layout.shape[s]).unwrap_or(1);
    let pct = (ci_level * 100.0).round();
    if panel_count <= MAX_PANELS {
        let mut panels = Vec::with_capacity(panel_count);
        for p in 0..panel_count {
            // Level combination of the panel factors (last factor fastest).
            let mut rest = p;
            let mut combo = vec![0; others.len()];
            for (j, &f) in others.iter().enumerate().rev() {
                combo[j] = rest % layout.shape[f];
                rest /= layout.shape[f];
            }
            let mut means = Vec::new();
            for a in 0..layout.shape[axes.axis] {
                for s in 0..series_levels {
                    let mut levels = vec![0; k];
                    levels[axes.axis] = a;
                    if let Some(sf) = axes.series {
                        levels[sf] = s;
                    }
                    for (j, &f) in others.iter().enumerate() {
                        levels[f] = combo[j];
                    }
                    let c = layout.cell_index(&levels);
                    let cell = &cells[c];
                    means.push(InteractionMean {
                        axis_level: a,
                        series_level: s,
                        mean: cell.mean,
                        low: cell.mean_ci.and_then(|i| i.low),
                        high: cell.mean_ci.and_then(|i| i.high),
                        n: cell.n,
                    });
                }
            }
            let at = others
                .iter()
                .zip(&combo)
                .map(|(&f, &l)| (layout.factors[f].name.clone(), layout.factors[f].levels[l].clone()))
                .collect();
            panels.push(InteractionPanel { at, means });
        }
        return Interaction {
            axis: axes.axis,
            series: axes.series,
            panel_factors: others,
            averaged_over: Vec::new(),
            panels,
            interval: format!("{pct}% t interval of each cell mean from the cell's own standard deviation"),
        };
    }
    let (panel, interval) = averaged_means(design, fit, axes, ci_level);
    Interaction {
        axis: axes.axis,
        series: axes.series,
        panel_factors: Vec::new(),
        averaged_over: others,
        panels: vec![panel],
        interval,
    }
}

/// The interaction means averaged over every factor other than the axis and series
/// (used when one panel per level combination would make more than [`MAX_PANELS`]):
/// for each (axis, series) level pair, the unweighted mean of its m cell means with the
/// pooled-error t interval, SE = √(MSE·Σ 1/n_c)/m, df N − C (the marginal-means formula
/// of `cells::marginal_means`). Returns the panel and the interval in words.
pub fn averaged_means(design: &Design, fit: &Fit, axes: InteractionAxes, ci_level: f64) -> (InteractionPanel, String) {
    let layout = &design.layout;
    let series_levels = axes.series.map(|s| layout.shape[s]).unwrap_or(1);
    let cell_levels: Vec<Vec<usize>> = (0..design.n_cells()).map(|c| layout.cell_levels(c)).collect();
    let loc = design.location();
    let mse = fit.mse();
    let t = if fit.df_error > 0 { dist::t_quantile(0.5 + ci_level / 2.0, fit.df_error as f64) } else { f64::NAN };
    let mut means = Vec::new();
    for a in 0..layout.shape[axes.axis] {
        for s in 0..series_levels {
            let members: Vec<usize> = (0..design.n_cells())
                .filter(|&c| cell_levels[c][axes.axis] == a && axes.series.is_none_or(|sf| cell_levels[c][sf] == s))
                .collect();
            let m = members.len() as f64;
            let mean = members.iter().map(|&c| fit.mean[c]).sum::<f64>() / m;
            let se = (mse * members.iter().map(|&c| 1.0 / fit.n[c] as f64).sum::<f64>()).sqrt() / m;
            let (low, high) = (finite(loc + mean - t * se), finite(loc + mean + t * se));
            let both = low.is_some() && high.is_some();
            means.push(InteractionMean {
                axis_level: a,
                series_level: s,
                mean: loc + mean,
                low: low.filter(|_| both),
                high: high.filter(|_| both),
                n: members.iter().map(|&c| fit.n[c]).sum(),
            });
        }
    }
    let pct = (ci_level * 100.0).round();
    (
        InteractionPanel { at: Vec::new(), means },
        format!("{pct}% t interval of each unweighted mean of cell means, pooled error (df {})", fit.df_error),
    )
}

/// The null histograms of every engine that kept its permutation distributions.
fn null_histograms(engines: &[EngineResult]) -> Vec<NullHistogram> {
    let mut out = Vec::new();
    for e in engines {
        let Some(Details::Permutation { terms }) = &e.details else {
            continue;
        };
        for d in terms {
            let result = e.terms.iter().find(|r| r.term == d.term);
            let (df1, df2) = result.map(|r| (r.df1, r.df2)).unwrap_or((None, None));
            if let Some(h) = histogram(d, &e.engine, result.and_then(|r| r.p), df1, df2) {
                out.push(h);
            }
        }
    }
    out
}

/// Share of the resampled statistics at or below `x`, from the type-7 quantile points
/// `q` (probabilities i/(K − 1); +∞ for infinite statistics) by linear interpolation.
fn null_cdf(q: &[f64], x: f64) -> f64 {
    let k = q.len();
    let j = q.partition_point(|&v| v <= x);
    if j == 0 {
        return 0.0;
    }
    if j >= k {
        return 1.0;
    }
    let i = j - 1;
    let frac = if q[j].is_finite() && q[j] > q[i] { (x - q[i]) / (q[j] - q[i]) } else { 0.0 };
    (i as f64 + frac) / (k - 1) as f64
}

fn histogram(
    d: &NullDistribution,
    engine: &str,
    p: Option<f64>,
    df1: Option<f64>,
    df2: Option<f64>,
) -> Option<NullHistogram> {
    let q: Vec<f64> = d.quantiles.iter().map(|v| v.unwrap_or(f64::INFINITY)).collect();
    if q.len() < 2 || !q[0].is_finite() {
        return None;
    }
    let k = q.len();
    let upper = q[((NULL_RANGE_QUANTILE * (k - 1) as f64).ceil() as usize).min(k - 1)];
    let finite_max = q.iter().rev().copied().find(|v| v.is_finite()).unwrap_or(q[0]);
    let mut high = if upper.is_finite() { upper } else { finite_max };
    let low = q[0].min(0.0);
    let observed = d.observed;
    let mut off_scale = false;
    if let Some(o) = observed {
        if o > high && o <= NULL_OFF_SCALE * high {
            high = o;
        } else if o > high {
            off_scale = true;
        }
    }
    if high <= low {
        high = low + 1.0;
    }
    let width = (high - low) / NULL_BINS as f64;
    let reference = |x: f64| -> Option<f64> {
        let x = x.max(0.0);
        match (d.statistic.as_str(), df1, df2) {
            ("F", Some(a), Some(b)) if a > 0.0 && b > 0.0 => finite(dist::f_cdf(x, a, b)),
            ("W", Some(a), _) if a > 0.0 => finite(dist::chi2_cdf(x, a)),
            _ => None,
        }
    };
    let reference_name = match (d.statistic.as_str(), df1, df2) {
        ("F", Some(a), Some(b)) if a > 0.0 && b > 0.0 => Some(format!("F({a}, {b})")),
        ("W", Some(a), _) if a > 0.0 => Some(format!("χ²({a})")),
        _ => None,
    };
    let bins: Vec<NullBin> = (0..NULL_BINS)
        .map(|b| {
            let (a, z) = (low + width * b as f64, if b + 1 == NULL_BINS { high } else { low + width * (b + 1) as f64 });
            let share = (null_cdf(&q, z) - null_cdf(&q, a)).max(0.0);
            let reference = match (reference(a), reference(z)) {
                (Some(fa), Some(fz)) => Some((fz - fa).max(0.0)),
                _ => None,
            };
            NullBin { low: a, high: z, share, reference }
        })
        .collect();
    Some(NullHistogram {
        engine: engine.to_string(),
        term: d.term.clone(),
        statistic: d.statistic.clone(),
        observed,
        p,
        resamples: d.resamples,
        exact: d.exact,
        beyond: (1.0 - null_cdf(&q, high)).max(0.0),
        bins,
        observed_off_scale: off_scale,
        reference: reference_name,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::design::Factor;

    /// The Q-Q plot of `design` against sorting every (standardized residual, line) pair.
    fn assert_qq_equals_sorting_every_point(design: &Design, what: &str) {
        let fit = Fit::new(design);
        let (_, qq) = residual_plots(design, &fit);
        let qq = qq.unwrap();
        let mse = fit.mse();
        let mut all: Vec<(f64, u64)> = Vec::new();
        for c in 0..design.n_cells() {
            let n = design.cell_values(c).len() as f64;
            let scale = (mse * (1.0 - 1.0 / n)).sqrt();
            let start = design.cell_range(c).start;
            for (i, &v) in design.cell_values(c).iter().enumerate() {
                let z = (v - fit.mean[c]) / scale;
                if z.is_finite() {
                    all.push((z, design.lines()[start + i]));
                }
            }
        }
        all.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
        assert_eq!(qq.n, all.len(), "{what}");
        assert_eq!(qq.excluded, design.n_obs() - all.len(), "{what}");
        let ranks: Vec<usize> = if all.len() <= QQ_POINTS_MAX {
            (0..all.len()).collect()
        } else {
            let inner = all.len() - 2 * QQ_TAIL_KEEP;
            let mut r: Vec<usize> = (0..QQ_TAIL_KEEP).collect();
            r.extend(even_ranks(inner, QQ_POINTS_MAX - 2 * QQ_TAIL_KEEP).map(|k| QQ_TAIL_KEEP + k));
            r.extend(all.len() - QQ_TAIL_KEEP..all.len());
            r.dedup();
            r
        };
        assert_eq!(qq.points.len(), ranks.len(), "{what}");
        for (p, &k) in qq.points.iter().zip(&ranks) {
            assert_eq!((p.standardized.to_bits(), p.line), (all[k].0.to_bits(), all[k].1), "{what}, rank {k}");
        }
    }

    /// The merged Q-Q plot against sorting every point, on rows whose cells interleave
    /// in the file and whose values tie heavily within and across cells (equal and
    /// unequal cell sizes).
    #[test]
    fn merged_qq_plot_equals_sorting_every_point() {
        for rows in [900usize, 4000, 30_001] {
            let mut csv = String::from("a,b,y\n");
            let mut x: u64 = 0x9E37_79B9_7F4A_7C15 ^ rows as u64;
            for i in 0..rows {
                x ^= x << 13;
                x ^= x >> 7;
                x ^= x << 17;
                let (a, b) = (["p", "q"][i % 2], ["r", "s", "t"][(i / 2) % 3]);
                csv.push_str(&format!("{a},{b},{}\n", (x % 9) as f64 * 0.5));
            }
            let spec = crate::config::DataSpec::new(crate::config::Source::Stdin, "y", &["a", "b"]);
            let loc = crate::error::Location::file("t.csv");
            let obs = crate::data::parse(csv.as_bytes(), &spec, "t.csv", &loc).unwrap();
            let design = Design::build(&obs, &spec).unwrap();
            assert_qq_equals_sorting_every_point(&design, &format!("{rows} rows"));
        }
    }

    /// Values a few units in the last place apart (their truncated keys coincide, so
    /// the exact order is restored within spans), a cell of one observation (no
    /// standardized residual), and values of extreme magnitude.
    #[test]
    fn qq_plot_orders_near_ties_and_skips_non_finite_residuals() {
        let mut x: u64 = 0x2545_F491_4F6C_DD1D;
        let mut near = |n: usize, base: f64| -> Vec<f64> {
            (0..n)
                .map(|_| {
                    x ^= x << 13;
                    x ^= x >> 7;
                    x ^= x << 17;
                    let ulps = (x % 7) as i64 - 3;
                    f64::from_bits((base.to_bits() as i64 + ulps) as u64) + [0.0, 1.0, -1.0][(x >> 20) as usize % 3]
                })
                .collect()
        };
        let cells = vec![near(1500, 10.0), near(1, 10.0), near(1700, 10.0), near(900, 10.0)];
        let design = Design::from_cells("y", vec![factor("A", &["a", "b"]), factor("B", &["c", "d"])], &cells).unwrap();
        assert_qq_equals_sorting_every_point(&design, "near ties");
        let cells = vec![vec![0.0, 1.0, 2.0, 1e308], vec![-1e308, 0.5, 1.5, 1.0], vec![1.0, 2.0], vec![3.0, 4.0]];
        let design = Design::from_cells("y", vec![factor("A", &["a", "b"]), factor("B", &["c", "d"])], &cells).unwrap();
        assert_qq_equals_sorting_every_point(&design, "extreme magnitudes");
    }

    fn factor(name: &str, levels: &[&str]) -> Factor {
        Factor { name: name.into(), levels: levels.iter().map(|s| s.to_string()).collect(), measured: false }
    }

    fn design(factors: Vec<Factor>, cells: &[Vec<f64>]) -> Design {
        Design::from_cells("y", factors, cells).unwrap()
    }

    #[test]
    fn axes_default_to_most_levels_and_reject_bad_names() {
        let d = design(
            vec![factor("a", &["1", "2"]), factor("b", &["x", "y", "z"])],
            &(0..6).map(|c| vec![c as f64, c as f64 + 1.5]).collect::<Vec<_>>(),
        );
        let none = PlotAxes::default();
        assert_eq!(InteractionAxes::resolve(&d, &none).unwrap(), InteractionAxes { axis: 1, series: Some(0) });
        let given = PlotAxes { axis: Some("a".into()), series: None };
        assert_eq!(InteractionAxes::resolve(&d, &given).unwrap(), InteractionAxes { axis: 0, series: Some(1) });
        let series = PlotAxes { axis: None, series: Some("b".into()) };
        assert_eq!(InteractionAxes::resolve(&d, &series).unwrap(), InteractionAxes { axis: 0, series: Some(1) });
        let bad = PlotAxes { axis: Some("c".into()), series: None };
        assert_eq!(InteractionAxes::resolve(&d, &bad).unwrap_err().exit_code(), 2);
        let same = PlotAxes { axis: Some("a".into()), series: Some("a".into()) };
        assert_eq!(InteractionAxes::resolve(&d, &same).unwrap_err().exit_code(), 2);
    }

    #[test]
    fn fences_whiskers_and_thinning() {
        // One cell: 1..=9 and 100 (far out), 20 (outside? Q1 = 3.25, Q3 = 8.75 after adding).
        let mut v: Vec<f64> = (1..=9).map(f64::from).collect();
        v.push(100.0);
        let d = design(vec![factor("a", &["p", "q"])], &[v.clone(), vec![1.0, 2.0, 3.0]]);
        let fit = Fit::new(&d);
        let cells = crate::diagnostics::cells::cell_table(&d, 0.2, 0.95);
        let axes = InteractionAxes { axis: 0, series: None };
        let pd = compute(&d, &fit, &cells, axes, 0.95, &[]);
        let c = &pd.cells[0];
        // numpy.percentile([1..9, 100], [25, 50, 75]) = 3.25, 5.5, 7.75 (computed by hand
        // with the type-7 rule h = (n − 1)p).
        assert!((c.q1 - 3.25).abs() < 1e-12 && (c.median - 5.5).abs() < 1e-12 && (c.q3 - 7.75).abs() < 1e-12);
        assert_eq!((c.whisker_low, c.whisker_high), (1.0, 9.0));
        let far: Vec<u64> = c.points.iter().filter(|p| p.kind == PointKind::FarOut).map(|p| p.line).collect();
        assert_eq!(far.len(), 1);
        assert_eq!(c.points.iter().find(|p| p.kind == PointKind::FarOut).unwrap().value, 100.0);
        assert_eq!(pd.qq.as_ref().unwrap().n, 13);
        assert_eq!(pd.interaction.panels.len(), 1);
        assert_eq!(pd.interaction.panels[0].means.len(), 2);

        // Thinning keeps the extremes and every outside point.
        let mut big: Vec<f64> = (0..5000).map(|i| (i as f64 * 0.618).sin()).collect();
        big.push(50.0);
        let d = design(vec![factor("a", &["p", "q"])], &[big, (0..5000).map(|i| (i as f64).cos()).collect()]);
        let fit = Fit::new(&d);
        let cells = crate::diagnostics::cells::cell_table(&d, 0.2, 0.95);
        let pd = compute(&d, &fit, &cells, axes, 0.95, &[]);
        let c = &pd.cells[0];
        assert!(c.points.len() <= STRIP_POINTS_MAX + 1);
        assert!(c.points.iter().any(|p| p.value == 50.0));
        let qq = pd.qq.unwrap();
        assert_eq!(qq.points.len(), QQ_POINTS_MAX);
        assert_eq!(qq.n, 10_001);
        assert!(qq.points.windows(2).all(|w| w[0].standardized <= w[1].standardized));
        assert_eq!(
            qq.points.last().unwrap().line,
            qq.points.iter().max_by(|a, b| a.standardized.total_cmp(&b.standardized)).unwrap().line
        );
    }

    #[test]
    fn null_cdf_inverts_the_quantile_function() {
        let q = [0.0, 1.0, 2.0, 4.0, f64::INFINITY];
        assert_eq!(null_cdf(&q, -1.0), 0.0);
        assert!((null_cdf(&q, 0.5) - 0.125).abs() < 1e-15);
        assert!((null_cdf(&q, 3.0) - 0.625).abs() < 1e-15);
        assert!((null_cdf(&q, 1e9) - 0.75).abs() < 1e-15);
    }
}
