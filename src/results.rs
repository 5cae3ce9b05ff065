//! The results: plain `Serialize` structs that are the `quorum.results/1` JSON contract.
//!
//! Field names follow DESIGN.md "results.json (the contract)"; later issues may add
//! fields but never rename these. A value that does not exist is `None` (JSON `null`):
//! numbers pass through [`finite`] so that a NaN or infinity never reaches the output.
//! Renderers read these structs and never compute statistics.

use serde::Serialize;
use std::collections::BTreeMap;

/// The schema id written at the top of every results object.
pub const SCHEMA: &str = "quorum.results/1";

/// `Some(x)` when x is finite, else `None`: the only way numbers enter the results.
pub fn finite(x: f64) -> Option<f64> {
    x.is_finite().then_some(x)
}

/// The whole analysis: what `--format json` prints and `results.json` holds.
#[derive(Debug, Clone, Serialize)]
pub struct Analysis {
    /// Always [`SCHEMA`].
    pub schema: &'static str,
    /// What was read.
    pub input: InputSummary,
    /// Factors, levels and the cell table.
    pub design: DesignSummary,
    /// Assumption checks and flags.
    pub diagnostics: Diagnostics,
    /// Each engine's result for every term.
    pub engines: Vec<EngineResult>,
    /// Per-term verdict across engines.
    pub concordance: Vec<Concordance>,
    /// Reruns without far-out points (descriptive).
    pub sensitivity: Vec<Sensitivity>,
    /// Simple effects and pairwise comparisons.
    pub followup: Vec<Followup>,
    /// Version, seed, threads and command.
    pub reproducibility: Reproducibility,
    /// `analyze --calibrate`: each engine's rejection rate under its own null on data
    /// shaped like these (absent without the flag).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub calibration: Option<crate::plan::Calibration>,
    /// The primary engine and why (METHODS §11.2); null for `describe`.
    pub primary_engine: Option<PrimaryChoice>,
    /// What the report's plots draw (per-cell points, quartiles, Q-Q positions, binned
    /// null distributions). Not part of results.json: it repeats the data row by row.
    #[serde(skip)]
    pub plot_data: Option<crate::diagnostics::plotdata::PlotData>,
}

/// What was read from the input.
#[derive(Debug, Clone, Serialize)]
pub struct InputSummary {
    /// The input as named on the command line (`<stdin>` for standard input).
    pub path: String,
    /// Data rows in the file (excluding header and blank lines).
    pub rows_read: usize,
    /// Rows in the analysis.
    pub rows_used: usize,
    /// Rows left out, with their input lines and reasons.
    pub dropped: Vec<crate::data::Dropped>,
}

/// A factor and its levels in analysis order.
#[derive(Debug, Clone, Serialize)]
pub struct FactorSummary {
    /// Column name.
    pub name: String,
    /// Level labels in analysis order.
    pub levels: Vec<String>,
    /// Measured (not manipulated): marked with `--measured`.
    pub measured: bool,
}

/// Shapiro–Wilk W and p.
#[derive(Debug, Clone, Copy, Serialize)]
pub struct ShapiroWilk {
    /// W statistic.
    #[serde(rename = "W")]
    pub w: f64,
    /// p-value (Royston 1995).
    pub p: f64,
}

/// An interval with its level.
#[derive(Debug, Clone, Copy, Serialize)]
pub struct Interval {
    /// Lower end, outcome units.
    pub low: Option<f64>,
    /// Upper end, outcome units.
    pub high: Option<f64>,
    /// Confidence level, e.g. 0.95.
    pub level: f64,
}

/// One row of the cell table (all location and spread values in outcome units).
#[derive(Debug, Clone, Serialize)]
pub struct CellSummary {
    /// Level of each factor, in factor order.
    pub levels: Vec<String>,
    /// Observations in the cell.
    pub n: usize,
    /// Arithmetic mean.
    pub mean: f64,
    /// Standard deviation (n − 1 denominator); null for n = 1.
    pub sd: Option<f64>,
    /// Standard error of the mean sd/√n; null for n = 1.
    pub se: Option<f64>,
    /// Classical t interval for the mean from the cell's own sd (df n − 1); null for n = 1.
    pub mean_ci: Option<Interval>,
    /// Median (mean of the two middle values for even n).
    pub median: f64,
    /// Trimmed mean with proportion `trim` cut from each end (g = ⌊trim·n⌋).
    pub trimmed_mean: f64,
    /// Trimming proportion used for `trimmed_mean` and `winsorized_sd`.
    pub trim: f64,
    /// Winsorized standard deviation (same g, n − 1 denominator); null for n = 1.
    pub winsorized_sd: Option<f64>,
    /// Bias-adjusted skewness G1 (Joanes & Gill 1998); null for n < 3 or a constant cell.
    pub skewness: Option<f64>,
    /// Standard error of G1 under normality; null for n < 3.
    pub skewness_se: Option<f64>,
    /// Bias-adjusted excess kurtosis G2; null for n < 4 or a constant cell.
    pub excess_kurtosis: Option<f64>,
    /// Standard error of G2 under normality; null for n < 4.
    pub excess_kurtosis_se: Option<f64>,
    /// Smallest value.
    pub min: f64,
    /// Largest value.
    pub max: f64,
    /// Shapiro–Wilk test in the cell; null where not computed or not applicable.
    pub shapiro_wilk: Option<ShapiroWilk>,
}

/// A marginal mean of one level of one factor.
#[derive(Debug, Clone, Serialize)]
pub struct MarginalMean {
    /// Factor name.
    pub factor: String,
    /// Level label.
    pub level: String,
    /// Observations at this level.
    pub n: usize,
    /// Unweighted: the plain average of the cell means at this level (what Type III tests).
    pub unweighted_mean: f64,
    /// t interval for the unweighted mean, pooled error (df N − C).
    pub unweighted_ci: Option<Interval>,
    /// Weighted: the mean of all observations at this level.
    pub weighted_mean: f64,
    /// t interval for the weighted mean, pooled error (df N − C).
    pub weighted_ci: Option<Interval>,
}

/// Factors, levels and the cell table.
#[derive(Debug, Clone, Serialize)]
pub struct DesignSummary {
    /// Outcome column.
    pub outcome: String,
    /// Factors in `--factors` order.
    pub factors: Vec<FactorSummary>,
    /// Every cell has the same n.
    pub balanced: bool,
    /// Cells in row-major order (last factor fastest).
    pub cells: Vec<CellSummary>,
    /// Marginal means of every level of every factor.
    pub marginal_means: Vec<MarginalMean>,
}

/// A test with an F statistic.
#[derive(Debug, Clone, Copy, Serialize)]
pub struct FTest {
    /// Statistic.
    #[serde(rename = "F")]
    pub f: f64,
    /// Numerator df.
    pub df1: f64,
    /// Denominator df.
    pub df2: f64,
    /// p-value.
    pub p: f64,
}

/// An outlier flagged by a rule, pointing back into the input file.
#[derive(Debug, Clone, Serialize)]
pub struct Outlier {
    /// 1-based input line.
    pub line: u64,
    /// Cell name, e.g. `A=a1, B=b2`.
    pub cell: String,
    /// The value (outcome units).
    pub value: f64,
    /// Rule id, e.g. `tukey-1.5`, `tukey-3`, `mad-median`.
    pub rule: String,
}

/// A finding in plain words with a stable code (catalogue in DEVELOPERS.md).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Flag {
    /// Stable machine-readable code.
    pub code: String,
    /// Plain-language message.
    pub message: String,
}

/// Assumption checks.
#[derive(Debug, Clone, Serialize)]
pub struct Diagnostics {
    /// Levene's test (mean-centred).
    pub levene: Option<FTest>,
    /// Brown–Forsythe test (median-centred).
    pub brown_forsythe: Option<FTest>,
    /// Shapiro–Wilk on the full-model residuals.
    pub shapiro_wilk: Option<ShapiroWilk>,
    /// Outliers by rule.
    pub outliers: Vec<Outlier>,
    /// Largest over smallest cell variance; null when a cell has no variance.
    pub variance_ratio: Option<f64>,
    /// Largest over smallest cell size.
    pub n_ratio: f64,
    /// Findings.
    pub flags: Vec<Flag>,
    /// Skewness and excess kurtosis of the pooled full-model residuals, with SEs.
    pub residuals: Option<ResidualShape>,
    /// Largest over smallest cell MADN² (a variance ratio resistant to outliers).
    pub robust_variance_ratio: Option<f64>,
    /// Spearman correlation of cell sizes with cell variances (negative: larger cells
    /// have smaller variances, which makes the classical F liberal).
    pub n_variance_spearman: Option<f64>,
    /// Quantile definition of the quartiles and fences.
    pub quantile_definition: String,
    /// Robust summaries and outlier counts of every cell, in cell order.
    pub cells: Vec<CellDiagnostics>,
    /// How the flags were calibrated, with each statistic's null p-value.
    pub calibration: Option<Calibration>,
    /// Information that decides nothing (e.g. common-practice rules of thumb).
    pub notes: Vec<String>,
}

/// Shape of the pooled residuals y − ȳ_c (descriptive: residuals are not independent).
#[derive(Debug, Clone, Serialize)]
pub struct ResidualShape {
    /// Number of residuals N.
    pub n: usize,
    /// Bias-adjusted skewness G1.
    pub skewness: Option<f64>,
    /// Standard error of G1 under normality.
    pub skewness_se: Option<f64>,
    /// Bias-adjusted excess kurtosis G2.
    pub excess_kurtosis: Option<f64>,
    /// Standard error of G2 under normality.
    pub excess_kurtosis_se: Option<f64>,
}

/// Robust summaries and outlier counts of one cell (outcome units).
#[derive(Debug, Clone, Serialize)]
pub struct CellDiagnostics {
    /// Cell name, e.g. `A=a1, B=b2`.
    pub cell: String,
    /// Observations.
    pub n: usize,
    /// First quartile (type 7).
    pub q1: Option<f64>,
    /// Third quartile (type 7).
    pub q3: Option<f64>,
    /// Median absolute deviation scaled to σ under normality (MAD/Φ⁻¹(0.75)).
    pub madn: Option<f64>,
    /// Points beyond 1.5 × IQR from the quartiles.
    pub outside: usize,
    /// Points beyond 3 × IQR from the quartiles.
    pub far_out: usize,
    /// Points flagged by the MAD–median rule; null when MADN = 0 (rule not applicable).
    pub mad_median: Option<usize>,
    /// Why Shapiro–Wilk was not computed in this cell, when it was not.
    pub shapiro_wilk_not_applicable: Option<String>,
}

/// A statistic compared with its distribution under normal, equal-variance data of
/// the same cell sizes.
#[derive(Debug, Clone, Serialize)]
pub struct CalibratedCheck {
    /// Id, e.g. `residual_excess_kurtosis`.
    pub id: String,
    /// What the statistic is.
    pub description: String,
    /// Observed value.
    pub value: Option<f64>,
    /// Average of the statistic over the simulated normal datasets.
    pub null_mean: Option<f64>,
    /// Median of the statistic over the simulated normal datasets.
    pub null_median: Option<f64>,
    /// Monte Carlo p-value (1 + #{simulated ≥ observed})/(R + 1).
    pub null_p: Option<f64>,
    /// Whether the check raised its flag (null_p ≤ level, and any extra condition).
    pub flagged: bool,
}

/// How the flags were calibrated.
#[derive(Debug, Clone, Serialize)]
pub struct Calibration {
    /// The method in words.
    pub method: String,
    /// `simulation` (R normal datasets of these cell sizes, value by value) or
    /// `large-sample` (R draws of the statistics from their large-sample distributions,
    /// used when every cell has at least 1000 values).
    pub reference: String,
    /// Simulated datasets R.
    pub datasets: u64,
    /// A flag fires when its null p is at most this.
    pub level: f64,
    /// Each calibrated statistic.
    pub checks: Vec<CalibratedCheck>,
}

impl Calibration {
    /// What the flags were compared with, e.g. "1999 simulated normal, equal-variance
    /// datasets with these cell sizes".
    pub fn against(&self) -> String {
        if self.reference == "large-sample" {
            format!(
                "{} draws from the statistics' large-sample distributions for normal, equal-variance data with these cell sizes",
                self.datasets
            )
        } else {
            format!("{} simulated normal, equal-variance datasets with these cell sizes", self.datasets)
        }
    }
}

/// Decision of one engine on one term.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Decision {
    /// p < α.
    Reject,
    /// p ≥ α.
    Retain,
    /// A resampled p whose Monte Carlo interval contains α.
    Undetermined,
}

impl Decision {
    /// The decision as a word for reports: `reject`, `retain`, `undetermined`.
    pub fn word(self) -> &'static str {
        match self {
            Decision::Reject => "reject",
            Decision::Retain => "retain",
            Decision::Undetermined => "undetermined",
        }
    }

    /// [`Decision::word`] of an optional decision, `none` where there is none.
    pub fn word_or(d: Option<Decision>, none: &'static str) -> &'static str {
        d.map_or(none, Decision::word)
    }

    /// Reject when p < α, else retain.
    pub fn from_p(p: f64, alpha: f64) -> Decision {
        if p < alpha {
            Decision::Reject
        } else {
            Decision::Retain
        }
    }
}

/// Monte Carlo details of a resampled p-value.
#[derive(Debug, Clone, Serialize)]
pub struct MonteCarlo {
    /// Resamples drawn (or rearrangements enumerated when `exact`).
    pub resamples: u64,
    /// Resampled statistics at least as large as the observed one.
    pub exceedances: u64,
    /// Monte Carlo standard error of p.
    pub se: f64,
    /// Lower end of the 99% Clopper–Pearson interval of p.
    pub ci_low: f64,
    /// Upper end of the 99% Clopper–Pearson interval of p.
    pub ci_high: f64,
    /// All distinct rearrangements were enumerated.
    pub exact: bool,
    /// Resampling scheme, e.g. `freedman-lane`.
    pub scheme: String,
    /// Whether the scheme gives an exact test of this term's hypothesis (METHODS §3.2),
    /// as opposed to an asymptotically exact approximation; absent where the engine
    /// does not say.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub scheme_exact: Option<bool>,
}

/// An effect size with its interval.
#[derive(Debug, Clone, Serialize)]
pub struct Effect {
    /// Name, e.g. `partial_eta_squared`.
    pub name: String,
    /// Point estimate.
    pub value: Option<f64>,
    /// Lower end of the interval.
    pub ci_low: Option<f64>,
    /// Upper end of the interval.
    pub ci_high: Option<f64>,
    /// Confidence level of the interval (null when there is none).
    pub ci_level: Option<f64>,
}

impl Effect {
    /// A point estimate without an interval.
    pub fn point(name: &str, value: f64) -> Effect {
        Effect { name: name.into(), value: finite(value), ci_low: None, ci_high: None, ci_level: None }
    }
}

/// One engine's result on one term.
#[derive(Debug, Clone, Serialize)]
pub struct TermResult {
    /// Term id (`A`, `A:B`).
    pub term: String,
    /// Test statistic.
    pub statistic: Option<f64>,
    /// Numerator df.
    pub df1: Option<f64>,
    /// Denominator df.
    pub df2: Option<f64>,
    /// p-value.
    pub p: Option<f64>,
    /// Decision at α; null when not applicable.
    pub decision: Option<Decision>,
    /// Monte Carlo details for resampling engines.
    pub mc: Option<MonteCarlo>,
    /// The headline effect size.
    pub effect: Option<Effect>,
    /// Every effect size the engine reports.
    pub effects: Vec<Effect>,
    /// Why the engine cannot run on this term, when it cannot.
    pub not_applicable: Option<String>,
    /// Remarks for the reader.
    pub notes: Vec<String>,
}

impl TermResult {
    /// A term the engine cannot test, with the reason.
    pub fn not_applicable(term: &str, reason: impl Into<String>) -> TermResult {
        TermResult {
            term: term.into(),
            statistic: None,
            df1: None,
            df2: None,
            p: None,
            decision: None,
            mc: None,
            effect: None,
            effects: Vec::new(),
            not_applicable: Some(reason.into()),
            notes: Vec::new(),
        }
    }
}

/// A row of an ANOVA table.
#[derive(Debug, Clone, Serialize)]
pub struct AnovaRow {
    /// Term id, `Residual` or `Total`.
    pub source: String,
    /// Sum of squares.
    pub ss: f64,
    /// Degrees of freedom.
    pub df: usize,
    /// Mean square SS/df (null for the total).
    pub ms: Option<f64>,
    /// F (terms only).
    #[serde(rename = "F")]
    pub f: Option<f64>,
    /// p-value (terms only).
    pub p: Option<f64>,
}

/// The classical engine's ANOVA table for the reported SS type.
#[derive(Debug, Clone, Serialize)]
pub struct AnovaTable {
    /// 1, 2 or 3.
    pub ss_type: u8,
    /// Terms in canonical order, then `Residual` and `Total` (corrected).
    pub rows: Vec<AnovaRow>,
}

/// Engine-specific details beyond the per-term results.
#[derive(Debug, Clone, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Details {
    /// The classical engine's ANOVA table (for `--ss`) and, when that is not Type III,
    /// the term results of the requested type.
    Classical {
        /// ANOVA table of the reported SS type.
        anova: AnovaTable,
        /// Term results under `--ss 1|2` (the `terms` list always holds Type III).
        reported_terms: Option<Vec<TermResult>>,
    },
    /// The trimmed engine's per-cell summaries and every Welch–James quantity per term.
    Trimmed {
        /// Trimming proportion γ.
        trim: f64,
        /// Reference distribution behind `terms[].p`: `f`, `adjusted` or `bootstrap`.
        reference: String,
        /// Per-cell trimmed summaries, cell order.
        cells: Vec<TrimmedCellRow>,
        /// Per-term Johansen quantities, canonical order.
        terms: Vec<WelchJamesRow>,
    },
    /// The `art` engine's alignment checks, the ties in the outcome and the published
    /// limitations that apply to these data.
    Art(ArtDetails),
    /// The `rank-ats` engine's ranks, relative effects and degrees of freedom.
    RankAts(RankAtsDetails),
    /// The permutation engines' null distributions, thinned for plots, with the tail
    /// approximation where one was asked for.
    Permutation {
        /// One entry per tested term, canonical order.
        terms: Vec<NullDistribution>,
    },
    /// The `bootstrap` engine's wild-bootstrap counts and its stratified bootstrap
    /// intervals (descriptive; never a decision rule).
    Bootstrap(BootstrapDetails),
}

/// A term's permutation distribution, thinned to at most [`NULL_QUANTILE_POINTS`]
/// sorted quantile points.
#[derive(Debug, Clone, Serialize)]
pub struct NullDistribution {
    /// Term id.
    pub term: String,
    /// What the values are: `F` or `W` (Wald-type).
    pub statistic: String,
    /// The observed statistic.
    pub observed: Option<f64>,
    /// Resampled (or enumerated) statistics behind the quantiles (all of them, up to
    /// about a million per term).
    pub resamples: u64,
    /// All distinct rearrangements were enumerated.
    pub exact: bool,
    /// Type-7 quantiles of the resampled statistics at probabilities i/(K − 1),
    /// i = 0..K−1 (K = min(resamples, 1001)); null for a resample whose statistic is
    /// infinite (zero permuted error).
    pub quantiles: Vec<Option<f64>>,
    /// Resamples whose statistic was undefined (a permuted cell without variance);
    /// they count as exceedances.
    pub degenerate: u64,
    /// Asymptotic p-value of the same statistic, where the engine has one (χ² for W).
    pub asymptotic_p: Option<f64>,
    /// Generalized-Pareto tail approximation, when asked for and applicable.
    pub tail: Option<TailApproximationResult>,
}

/// Most quantile points kept per null distribution.
pub const NULL_QUANTILE_POINTS: usize = 1001;

/// The generalized-Pareto tail approximation of a tiny permutation p (METHODS §3.5).
#[derive(Debug, Clone, Serialize)]
pub struct TailApproximationResult {
    /// Approximate p, reported beside the plain permutation p (null when the fit failed).
    pub p: Option<f64>,
    /// `fitted`, or why there is no approximation (`too-few-resamples`, `fit-rejected`, …).
    pub status: String,
    /// Exceedances over the threshold used in the fit.
    pub exceedances_used: u64,
    /// Threshold t between the two order statistics.
    pub threshold: Option<f64>,
    /// Shape ξ of the fitted distribution.
    pub shape: Option<f64>,
    /// Scale σ of the fitted distribution.
    pub scale: Option<f64>,
    /// Anderson–Darling goodness-of-fit p (parametric bootstrap) of the accepted fit.
    pub fit_p: Option<f64>,
}

/// Trimmed summaries of one cell (outcome units).
#[derive(Debug, Clone, Serialize)]
pub struct TrimmedCellRow {
    /// Level of each factor.
    pub levels: Vec<String>,
    /// Observations n.
    pub n: usize,
    /// Trimmed from each end, g = ⌊γn⌋.
    pub g: usize,
    /// Left after trimming, h = n − 2g.
    pub h: usize,
    /// Trimmed mean.
    pub trimmed_mean: Option<f64>,
    /// Winsorized variance (n − 1 denominator).
    pub winsorized_variance: Option<f64>,
    /// Standard error of the trimmed mean √d, d = (n − 1)s²_w/(h(h − 1)).
    pub se: Option<f64>,
}

/// Johansen's Welch–James quantities of one term (METHODS §4.2–§4.3).
#[derive(Debug, Clone, Serialize)]
pub struct WelchJamesRow {
    /// Term id.
    pub term: String,
    /// Johansen's Q (a Wald form in trimmed means with V = diag(d)).
    #[serde(rename = "Q")]
    pub q_stat: Option<f64>,
    /// Johansen's A = Σ R_cc²/(h_c − 1).
    #[serde(rename = "A")]
    pub a: Option<f64>,
    /// c_J = q + 2A − 6A/(q + 2).
    pub c_j: Option<f64>,
    /// ν₁ = q.
    pub df1: Option<f64>,
    /// ν₂ = q(q + 2)/(3A).
    pub df2: Option<f64>,
    /// F_WJ = Q/c_J.
    #[serde(rename = "F")]
    pub f: Option<f64>,
    /// P(F(ν₁, ν₂) ≥ F_WJ).
    pub p_f: Option<f64>,
    /// Adjusted-critical-value p, P(χ²_q ≥ c*).
    pub p_adjusted: Option<f64>,
    /// Bootstrap p (1 + #{Q* ≥ Q})/(B + 1), when the bootstrap reference ran.
    pub p_bootstrap: Option<f64>,
    /// Resamples whose Q* was undefined (singular covariance), counted as exceedances.
    pub bootstrap_undefined: Option<u64>,
}

/// One engine's results for every term.
#[derive(Debug, Clone, Serialize)]
pub struct EngineResult {
    /// Engine id, e.g. `classical`.
    pub engine: String,
    /// Settings that shaped the result; always includes `ss_type`.
    pub settings: BTreeMap<String, serde_json::Value>,
    /// Type III hypothesis of every term, canonical order.
    pub terms: Vec<TermResult>,
    /// Engine-specific details.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub details: Option<Details>,
    /// Remarks that apply to the whole engine.
    pub notes: Vec<String>,
}

/// Verdict of one term across engines.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Verdict {
    /// Every engine that decided rejects.
    Holds,
    /// Every engine that decided retains.
    NullHolds,
    /// They disagree.
    MethodDependent,
    /// No engine could decide.
    Undetermined,
}

impl Verdict {
    /// The verdict as words for reports: `holds`, `null holds`, `method-dependent`,
    /// `undetermined`.
    pub fn words(self) -> &'static str {
        match self {
            Verdict::Holds => "holds",
            Verdict::NullHolds => "null holds",
            Verdict::MethodDependent => "method-dependent",
            Verdict::Undetermined => "undetermined",
        }
    }
}

/// Concordance row of one term.
#[derive(Debug, Clone, Serialize)]
pub struct Concordance {
    /// Term id.
    pub term: String,
    /// Verdict.
    pub verdict: Verdict,
    /// Engines whose decision matches the primary engine's (or the majority's).
    pub agreeing: Vec<String>,
    /// Engines that decided the other way.
    pub dissenting: Vec<String>,
    /// Engines that could not decide.
    pub undetermined: Vec<String>,
    /// Engines that could not run on this term.
    pub not_applicable: Vec<String>,
    /// The primary engine, when one is chosen.
    pub primary: Option<String>,
    /// Why that engine is primary.
    pub reason: Option<String>,
    /// What `agreeing` and `dissenting` are measured against.
    pub basis: AgreementBasis,
    /// Engines whose p is below α (decided `reject`).
    pub rejecting: Vec<String>,
    /// Engines that decided `retain`.
    pub retaining: Vec<String>,
    /// Every engine's call on the term, in engine order.
    pub engines: Vec<EngineCall>,
    /// The primary engine's p lies within a factor √10 of α: |log10(p/α)| < 0.5
    /// (METHODS §11.1).
    pub borderline: bool,
    /// A 1-df term whose signed estimates point in different directions across the
    /// engines that have one (METHODS §11.1: serious, always shown).
    pub direction_conflict: bool,
    /// Smallest p over the engines that report one.
    pub p_min: Option<f64>,
    /// Largest p over the engines that report one.
    pub p_max: Option<f64>,
    /// log10(p_max/p_min): orders of magnitude between the engines' p-values.
    pub log10_p_spread: Option<f64>,
    /// Quantities computed alongside the engines for the explanations.
    pub evidence: Option<TermEvidence>,
    /// Disagreements tied to what quorum measured, worded as associations.
    pub explanations: Vec<String>,
}

/// What a concordance row's `agreeing`/`dissenting` lists are measured against.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum AgreementBasis {
    /// The primary engine's decision (it decided).
    Primary,
    /// No primary decision (no primary engine, or it is undetermined or not applicable
    /// on this term): the decision of the majority of the deciding engines.
    Majority,
    /// No primary decision and the deciding engines split evenly: nothing to agree
    /// with, so `agreeing` and `dissenting` are empty (see `rejecting`/`retaining`).
    EvenSplit,
    /// No engine decided.
    NoDecision,
}

/// What an engine's hypothesis is about (METHODS §11.1 "hypothesis family").
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum HypothesisFamily {
    /// Cell means (classical, hc, permutation, studentized permutation, wild bootstrap).
    Means,
    /// Cell trimmed means (trimmed Welch–James).
    TrimmedMeans,
    /// The effect on the aligned-rank scale (ART).
    AlignedRanks,
    /// Relative effects, i.e. the cells' distribution functions (rank ATS).
    RelativeEffects,
    /// An engine quorum does not describe.
    Other,
}

/// One engine's call on one term, as the concordance reads it.
#[derive(Debug, Clone, Serialize)]
pub struct EngineCall {
    /// Engine id.
    pub engine: String,
    /// What its hypothesis is about.
    pub family: HypothesisFamily,
    /// Its p-value.
    pub p: Option<f64>,
    /// Its decision; null when not applicable.
    pub decision: Option<Decision>,
    /// Sign of its estimate for a 1-df term (−1, 0, 1); null where it has no signed
    /// estimate (terms with more than 1 df, ART, not applicable).
    pub sign: Option<i8>,
    /// The signed estimate behind `sign` and what it is.
    pub estimate: Option<Effect>,
}

/// Quantities computed from the data for the concordance's explanations (never read
/// from another engine): see `evidence.rs`.
#[derive(Debug, Clone, Serialize)]
pub struct TermEvidence {
    /// Term id.
    pub term: String,
    /// 1-df terms: the unweighted contrast of cell means ℓ'ȳ (first level minus last;
    /// interactions: difference of differences), outcome units; the estimate of every
    /// engine that tests means.
    pub mean_contrast: Option<f64>,
    /// Welch–James on untrimmed means (γ = 0; Q = q × HC2 Wald F), beside the trimmed
    /// engine's test, when that engine trims.
    pub untrimmed_welch_james: Option<FTest>,
    /// Decision of `untrimmed_welch_james` at α.
    pub untrimmed_decision: Option<Decision>,
}

/// A rule of METHODS §11.2 for the primary engine.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum PrimaryRule {
    /// Rule 1: ordinal or heavily tied outcome → rank ATS.
    OrdinalOrTied,
    /// Rule 2: heavy tails or far-out points → trimmed Welch–James.
    HeavyTailsOrOutliers,
    /// Rule 3: unequal variances with unequal n → heteroscedastic test on means.
    UnequalVariancesUnequalN,
    /// Rule 4: skew in small cells → trimmed Welch–James with a bootstrap critical value.
    SkewSmallCells,
    /// Rule 5: non-normal, homoscedastic, small n → Freedman–Lane permutation.
    NonNormalSmallN,
    /// Rule 6: none of the above → classical F.
    NoneOfTheAbove,
}

/// A rule that applied but whose engine could not serve as primary.
#[derive(Debug, Clone, Serialize)]
pub struct SkippedRule {
    /// The rule.
    pub rule: PrimaryRule,
    /// Its number in METHODS §11.2.
    pub number: u8,
    /// Why it was passed over (its engine did not run, or ran with other settings).
    pub why: String,
}

/// The primary engine: chosen before looking at any p-value, by the first rule of
/// METHODS §11.2 that applies and whose engine ran, or fixed by the user (`--primary`).
#[derive(Debug, Clone, Serialize)]
pub struct PrimaryChoice {
    /// Engine id; null when no rule's engine ran.
    pub engine: Option<String>,
    /// The engine's settings as it ran (trimming, reference distribution, HC type, …).
    pub settings: BTreeMap<String, serde_json::Value>,
    /// Fixed in advance with `--primary` (preregistration) rather than chosen by the rules.
    pub fixed: bool,
    /// The rule that chose it (null when fixed or when none could).
    pub rule: Option<PrimaryRule>,
    /// Its number in METHODS §11.2.
    pub rule_number: Option<u8>,
    /// Why, in words, with the diagnostics that fired the rule.
    pub reason: String,
    /// The literature behind the rule.
    pub citations: Vec<String>,
    /// Calibrated (or structural) flag codes the rule read.
    pub flags: Vec<String>,
    /// Rules that applied first but whose engine could not serve.
    pub skipped: Vec<SkippedRule>,
    /// When fixed: what the rules would have chosen (information only).
    pub rules_would_choose: Option<String>,
    /// Remarks (estimand, engines not recommended under this rule, an engine that did not run).
    pub notes: Vec<String>,
}

/// A sensitivity variant: the analysis rerun on modified data (descriptive p-values).
#[derive(Debug, Clone, Serialize)]
pub struct Sensitivity {
    /// Variant id.
    pub variant: String,
    /// Rule used to remove points.
    pub rule: String,
    /// Input lines removed.
    pub rows_removed: Vec<u64>,
    /// Engine results on the modified data.
    pub engines: Vec<EngineResult>,
    /// Verdicts on the modified data.
    pub concordance: Vec<Concordance>,
    /// The removal rule in words, with its cut-offs.
    pub description: String,
    /// Share of simulated normal, equal-variance datasets with these cell sizes from
    /// which the rule removes at least one point.
    pub null_removal_rate: Option<f64>,
    /// Remarks (the p-values are descriptive; not-applicable reasons).
    pub notes: Vec<String>,
}

/// Follow-up tests of one effect (simple effects at each level combination of the
/// conditioning factors, pairwise comparisons; METHODS §9). Built by `followup`.
#[derive(Debug, Clone, Serialize)]
pub struct Followup {
    /// Effect probed: a term id (`A`, or `A:B` in designs with three or more factors).
    pub effect: String,
    /// Conditioning factors (empty: comparisons of the effect's marginal means).
    pub at: Vec<String>,
    /// Simple-effect tests, one per method and slice, grouped by method.
    pub tests: Vec<SimpleEffectTest>,
    /// Pairwise comparisons, grouped by method and slice.
    pub pairwise: Vec<PairwiseComparison>,
    /// Why this follow-up was run (the verdict that triggered it, or `requested`).
    pub origin: String,
    /// Multiplicity adjustment applied within each family (`holm`, `hochberg`, `bh`,
    /// `bonferroni`, `none`).
    pub adjustment: String,
    /// Remarks: how families are formed, what each method assumes, what was left out.
    pub notes: Vec<String>,
}

/// The level of one conditioning factor that defines a slice.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct SliceLevel {
    /// Factor name.
    pub factor: String,
    /// Level label.
    pub level: String,
}

/// One simple-effect test: the effect within one slice by one method.
#[derive(Debug, Clone, Serialize)]
pub struct SimpleEffectTest {
    /// Method id: `classical-pooled`, `classical-slice`, `hc`, `trimmed`, `permutation-slice`.
    pub method: String,
    /// What is tested and with which error, in words.
    pub hypothesis: String,
    /// The conditioning levels.
    pub slice: Vec<SliceLevel>,
    /// F statistic (Welch–James F_WJ for `trimmed`).
    pub statistic: Option<f64>,
    /// Numerator df.
    pub df1: Option<f64>,
    /// Denominator df.
    pub df2: Option<f64>,
    /// Raw p-value.
    pub p: Option<f64>,
    /// p adjusted over the slices of this method (the family).
    pub p_adjusted: Option<f64>,
    /// Decision from the adjusted p at α (`undetermined` for a resampled p whose
    /// Monte Carlo interval, scaled like the adjustment, contains α).
    pub decision: Option<Decision>,
    /// Monte Carlo details of the permutation version.
    pub mc: Option<MonteCarlo>,
    /// Effect size (partial η² of the slice contrast with its noncentral-F interval,
    /// classical versions only).
    pub effect: Option<Effect>,
    /// Why this method cannot test this slice.
    pub not_applicable: Option<String>,
    /// Remarks.
    pub notes: Vec<String>,
}

/// One pairwise comparison of two level combinations of the effect's factors.
#[derive(Debug, Clone, Serialize)]
pub struct PairwiseComparison {
    /// Method id: `tukey-kramer`, `games-howell`, `yuen`, `trimmed-contrast`, `art-c`.
    pub method: String,
    /// Scale of the estimate: `means`, `trimmed means` or `aligned ranks`.
    pub scale: String,
    /// The conditioning levels (empty for marginal means).
    pub slice: Vec<SliceLevel>,
    /// Levels of the effect's factors of the first mean.
    pub first: Vec<String>,
    /// Levels of the effect's factors of the second mean.
    pub second: Vec<String>,
    /// First minus second (outcome units; mean ranks for `art-c`).
    pub estimate: Option<f64>,
    /// Standard error of the estimate.
    pub se: Option<f64>,
    /// Test statistic.
    pub statistic: Option<f64>,
    /// `q` (studentized range) or `t`.
    pub statistic_name: String,
    /// Degrees of freedom of the reference distribution.
    pub df: Option<f64>,
    /// Number of means in the family (the studentized range's k).
    pub means_compared: usize,
    /// Raw p (already familywise for the studentized-range methods).
    pub p: Option<f64>,
    /// Adjusted p within the family (equal to `p` for the studentized-range methods).
    pub p_adjusted: Option<f64>,
    /// Decision from the adjusted p at α.
    pub decision: Option<Decision>,
    /// Lower end of the interval for the estimate (simultaneous for the
    /// studentized-range methods, per comparison otherwise).
    pub ci_low: Option<f64>,
    /// Upper end of the interval.
    pub ci_high: Option<f64>,
    /// Confidence level of the interval.
    pub ci_level: Option<f64>,
    /// Standardized effect size: Hedges' g with its noncentral-t interval (classical),
    /// the robust d_R (trimmed).
    pub effect: Option<Effect>,
    /// Why this comparison cannot be computed.
    pub not_applicable: Option<String>,
}

/// What it takes to reproduce the numbers.
#[derive(Debug, Clone, Serialize)]
pub struct Reproducibility {
    /// quorum version.
    pub version: String,
    /// Seed of every random stream.
    pub seed: u64,
    /// Worker threads used (never changes a result).
    pub threads: usize,
    /// The command as typed.
    pub command: String,
}

/// Ties among the outcome values (exact equality).
#[derive(Debug, Clone, Serialize)]
pub struct TieReport {
    /// Observations.
    pub n: usize,
    /// Distinct values.
    pub distinct: usize,
    /// Share of observations whose value another observation shares, in [0, 1].
    pub tied_share: f64,
    /// Share of the mid-rank variance lost to ties, Σ(t³ − t)/(N³ − N).
    pub rank_variance_lost: f64,
}

/// The internal consistency check of one term's alignment (aligned, unranked responses).
#[derive(Debug, Clone, Serialize)]
pub struct AlignmentReport {
    /// Term the responses are aligned for.
    pub term: String,
    /// Σ of the aligned responses over observations (0 in balanced designs; outcome units).
    pub observation_sum: f64,
    /// Σ of the aligned cell means (0 in every design; outcome units).
    pub cell_mean_sum: f64,
    /// Largest Type III SS of another term, as a share of SST (0 up to rounding).
    pub max_other_ss_share: f64,
    /// |SS of the term − its classical SS| as a share of SST (0 up to rounding).
    pub target_ss_error_share: f64,
    /// The bound both shares were checked against (exceeding it stops with exit 4).
    pub bound: f64,
}

/// Details of the aligned rank transform engine.
#[derive(Debug, Clone, Serialize)]
pub struct ArtDetails {
    /// How the responses were aligned.
    pub alignment: String,
    /// Aligned responses closer than this (outcome units) are tied when ranked.
    pub tie_tolerance: f64,
    /// Ties in the outcome.
    pub outcome_ties: TieReport,
    /// One alignment check per term, canonical order.
    pub checks: Vec<AlignmentReport>,
    /// Published limitations that apply to these data (codes in DEVELOPERS.md).
    pub flags: Vec<Flag>,
}

/// Relative effect of one cell (rank ATS).
#[derive(Debug, Clone, Serialize)]
pub struct RelativeEffect {
    /// Level of each factor.
    pub levels: Vec<String>,
    /// Observations in the cell.
    pub n: usize,
    /// p̂_c = (mean rank of the cell − ½)/N, in (0, 1); above ½: the cell tends to larger
    /// values than the reference distribution.
    pub value: Option<f64>,
}

/// Box-type degrees of freedom and the large-sample p of one term (rank ATS).
#[derive(Debug, Clone, Serialize)]
pub struct AtsTerm {
    /// Term id.
    pub term: String,
    /// tr(T V̂), the statistic's scale.
    pub trace: Option<f64>,
    /// Numerator df f̂.
    pub f_hat: Option<f64>,
    /// Denominator df f̂₀.
    pub f0_hat: Option<f64>,
    /// P(χ²_f̂/f̂ ≥ F): the large-sample p, for reference.
    pub p_large_sample: Option<f64>,
}

/// Details of the rank ANOVA-type statistic engine.
#[derive(Debug, Clone, Serialize)]
pub struct RankAtsDetails {
    /// `mid-ranks` or `pseudo-ranks`.
    pub ranks: String,
    /// Why those ranks.
    pub ranks_reason: String,
    /// The reference distribution the relative effects are measured against.
    pub reference: String,
    /// Relative effect of every cell, cell order.
    pub relative_effects: Vec<RelativeEffect>,
    /// Per-term scale and degrees of freedom, canonical order.
    pub terms: Vec<AtsTerm>,
}

/// What a bootstrap interval is for (the family of estimates it belongs to).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum IntervalFamily {
    /// Mean of one cell (outcome units).
    CellMean,
    /// Trimmed mean of one cell (outcome units; trimming as `trim`).
    CellTrimmedMean,
    /// Unweighted marginal mean of one level: the plain average of its cell means.
    MarginalMeanUnweighted,
    /// Weighted marginal mean of one level: the mean of its observations.
    MarginalMeanWeighted,
    /// Difference of two levels' unweighted marginal means (first minus second).
    LevelDifference,
    /// Interaction contrast of a 2×2 sub-table of two factors (difference of differences
    /// of cell means, unweighted over the other factors).
    InteractionContrast,
    /// Partial η² of a term (Type III).
    PartialEtaSquared,
    /// Partial ω² of a term (Type III).
    PartialOmegaSquared,
    /// Algina–Keselman–Penfield robust d of a 1-df term (first level minus last).
    RobustD,
}

/// Interval ends with the Monte Carlo standard error of each.
#[derive(Debug, Clone, Copy, Serialize)]
pub struct IntervalEnds {
    /// Lower end.
    pub low: Option<f64>,
    /// Upper end.
    pub high: Option<f64>,
    /// Monte Carlo standard error of the lower end (resampling noise at this B).
    pub low_mc_se: Option<f64>,
    /// Monte Carlo standard error of the upper end.
    pub high_mc_se: Option<f64>,
}

/// A stratified bootstrap interval of one estimate (METHODS §8).
#[derive(Debug, Clone, Serialize)]
pub struct BootstrapInterval {
    /// What kind of estimate.
    pub family: IntervalFamily,
    /// The factor (marginal means, level differences) or term (contrasts, effect sizes)
    /// it belongs to; null for cell estimates.
    pub term: Option<String>,
    /// The estimate named for people, e.g. `A=a1, B=b2` or `A: a1 − a2`.
    pub label: String,
    /// The estimate on the data.
    pub estimate: Option<f64>,
    /// Bootstrap bias, mean of θ* minus the estimate.
    pub bias: Option<f64>,
    /// Bootstrap standard error, sd of θ* (n − 1 denominator).
    pub se: Option<f64>,
    /// Percentile interval.
    pub percentile: Option<IntervalEnds>,
    /// BCa interval; null where BCa is undefined (see `bca_problem`).
    pub bca: Option<IntervalEnds>,
    /// Why BCa is undefined, when it is.
    pub bca_problem: Option<String>,
    /// BCa bias correction z0.
    pub z0: Option<f64>,
    /// BCa acceleration (stratified jackknife).
    pub acceleration: Option<f64>,
    /// Resamples whose statistic exists (the rest are counted in `flags`).
    pub resamples_used: u64,
    /// Stable codes: `degenerate`, `bca-undefined`, `undefined-resamples`, `near-bound`.
    pub flags: Vec<String>,
}

/// The wild-bootstrap count of one term.
#[derive(Debug, Clone, Serialize)]
pub struct WildTermRow {
    /// Term id.
    pub term: String,
    /// Observed HC3 Wald F.
    #[serde(rename = "F")]
    pub f: Option<f64>,
    /// Resamples drawn for this term (more than `--resamples` when extended near α).
    pub resamples: u64,
    /// Resamples with F* ≥ F(1 − 1e-10).
    pub exceedances: u64,
    /// Resamples whose F* was undefined (singular covariance), counted as exceedances.
    pub undefined: u64,
}

/// Details of the `bootstrap` engine.
#[derive(Debug, Clone, Serialize)]
pub struct BootstrapDetails {
    /// Wild-bootstrap weights, `rademacher` or `mammen`.
    pub wild_weights: String,
    /// Per-term wild-bootstrap counts (empty when the test could not run).
    pub wild: Vec<WildTermRow>,
    /// Stratified resamples behind the intervals.
    pub resamples: u64,
    /// Confidence level of the intervals.
    pub ci_level: f64,
    /// Trimming proportion of the trimmed means and of robust d.
    pub trim: f64,
    /// How the Monte Carlo error of the interval ends is computed.
    pub mc_error_method: String,
    /// Intervals, in the order cells, marginal means, level differences, interaction
    /// contrasts, effect sizes.
    pub intervals: Vec<BootstrapInterval>,
    /// Families left out and why (size limits).
    pub omitted: Vec<String>,
}
