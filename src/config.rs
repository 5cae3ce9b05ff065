//! The validated configuration the library runs on.
//!
//! The binary turns raw command-line flags into these typed values (a second stage,
//! so that the library never sees clap); every choice is an enum, every number has
//! been range-checked. Tests and other programs build a [`Config`] directly.

use std::path::PathBuf;

/// Where the data come from.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Source {
    /// A file on disk.
    File(PathBuf),
    /// Standard input (`-` on the command line).
    Stdin,
    /// Text already in memory, with a display name (the demo data compiled into the binary).
    Embedded {
        /// Name shown in messages and in `input.path`.
        name: String,
        /// The file's contents.
        text: &'static str,
    },
}

impl Source {
    /// The name used in messages and in `input.path`.
    pub fn display_name(&self) -> String {
        match self {
            Source::File(p) => p.display().to_string(),
            Source::Stdin => "<stdin>".to_string(),
            Source::Embedded { name, .. } => name.clone(),
        }
    }
}

/// Field delimiter of the input file.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Delimiter {
    /// Detect comma, tab or semicolon from the first lines.
    Auto,
    /// This byte.
    Byte(u8),
}

/// Everything the data layer needs to read and check a file.
#[derive(Debug, Clone)]
pub struct DataSpec {
    /// The input.
    pub source: Source,
    /// Name of the outcome column.
    pub outcome: String,
    /// Names of the factor columns, in the order given (this order defines term ids).
    pub factors: Vec<String>,
    /// Optional participant-id column: a repeated id is an input error.
    pub id: Option<String>,
    /// Tokens that mark a missing value (compared after trimming surrounding spaces).
    pub missing: Vec<String>,
    /// The field delimiter.
    pub delimiter: Delimiter,
    /// Numbers use a decimal comma (`7,5`) instead of a decimal point.
    pub decimal_comma: bool,
    /// User-given level order per factor (`--levels A=lo,mid,hi`).
    pub levels: Vec<(String, Vec<String>)>,
    /// Factors that are measured (e.g. age group) rather than manipulated.
    pub measured: Vec<String>,
    /// Spreadsheet sheet by name or 1-based position (first sheet when absent).
    pub sheet: Option<String>,
}

impl DataSpec {
    /// A description with every option at its default: delimiter detection, the default
    /// missing tokens, no id, level order from the data, no measured factors, first sheet.
    pub fn new(source: Source, outcome: &str, factors: &[&str]) -> DataSpec {
        DataSpec {
            source,
            outcome: outcome.to_string(),
            factors: factors.iter().map(|f| f.to_string()).collect(),
            id: None,
            missing: Self::default_missing(),
            delimiter: Delimiter::Auto,
            decimal_comma: false,
            levels: vec![],
            measured: vec![],
            sheet: None,
        }
    }

    /// The default missing-value tokens (DESIGN.md): `NA`, empty, `.`, `NaN`.
    pub fn default_missing() -> Vec<String> {
        ["NA", "", ".", "NaN"].iter().map(|s| s.to_string()).collect()
    }
}

/// Sum-of-squares type of the classical engine's reported table.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash, serde::Serialize)]
pub enum SsType {
    /// Sequential, in canonical term order.
    One,
    /// Marginality-respecting (Langsrud 2003).
    Two,
    /// Each term adjusted for all others, sum-to-zero coding (the default and the
    /// hypothesis every engine tests).
    Three,
}

impl SsType {
    /// 1, 2 or 3.
    pub fn number(self) -> u8 {
        match self {
            SsType::One => 1,
            SsType::Two => 2,
            SsType::Three => 3,
        }
    }
}

/// Reference distribution of the `trimmed` engine's Welch–James test (METHODS §4.2–§4.3).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum WjReference {
    /// F_WJ = Q/c_J against F(q, ν₂) (Johansen 1980; the default).
    F,
    /// Q against the adjusted χ²_q critical value (James 1951 / Johansen 1980, first order).
    Adjusted,
    /// Q against its bootstrap distribution from centred cells (Keselman, Wilcox & Lix 2003).
    Bootstrap,
}

impl WjReference {
    /// The id used on the command line and in `settings` (`f`, `adjusted`, `bootstrap`).
    pub fn id(self) -> &'static str {
        match self {
            WjReference::F => "f",
            WjReference::Adjusted => "adjusted",
            WjReference::Bootstrap => "bootstrap",
        }
    }
}

/// Heteroscedasticity-consistent covariance type of the `hc` engine (METHODS §7).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum HcType {
    /// White (1980): ω = 1.
    Hc0,
    /// Degrees-of-freedom scaled: ω = N/(N − p).
    Hc1,
    /// Leverage-corrected: ω = 1/(1 − h).
    Hc2,
    /// Jackknife-like (MacKinnon & White 1985): ω = 1/(1 − h)²; the default (Long & Ervin 2000).
    Hc3,
    /// Cribari-Neto (2004): ω = 1/(1 − h)^δ, δ = min(4, N·h/p).
    Hc4,
}

impl HcType {
    /// 0 to 4.
    pub fn number(self) -> u8 {
        match self {
            HcType::Hc0 => 0,
            HcType::Hc1 => 1,
            HcType::Hc2 => 2,
            HcType::Hc3 => 3,
            HcType::Hc4 => 4,
        }
    }

    /// `HC0` … `HC4`.
    pub fn label(self) -> &'static str {
        match self {
            HcType::Hc0 => "HC0",
            HcType::Hc1 => "HC1",
            HcType::Hc2 => "HC2",
            HcType::Hc3 => "HC3",
            HcType::Hc4 => "HC4",
        }
    }

    /// All five types in order.
    pub const ALL: [HcType; 5] = [HcType::Hc0, HcType::Hc1, HcType::Hc2, HcType::Hc3, HcType::Hc4];
}

/// Weights of the `bootstrap` engine's wild bootstrap (METHODS §8.6): each restricted
/// residual is multiplied by an independent draw v with E v = 0 and E v² = 1.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum WildWeights {
    /// v = ±1 with probability ½ each (Davidson & Flachaire 2008; the default).
    Rademacher,
    /// Mammen's (1993) two-point weights: v = −(√5 − 1)/2 with probability
    /// (√5 + 1)/(2√5), else (√5 + 1)/2, so that also E v³ = 1.
    Mammen,
}

impl WildWeights {
    /// The id used on the command line and in `settings` (`rademacher`, `mammen`).
    pub fn id(self) -> &'static str {
        match self {
            WildWeights::Rademacher => "rademacher",
            WildWeights::Mammen => "mammen",
        }
    }
}

/// Settings shared by the engines.
#[derive(Debug, Clone)]
pub struct Settings {
    /// Significance level for decisions (default 0.05).
    pub alpha: f64,
    /// Confidence level of intervals (default 0.95).
    pub ci_level: f64,
    /// SS type of the classical engine's reported table (default Type III).
    pub ss_type: SsType,
    /// Trimming proportion γ for trimmed means (default 0.2).
    pub trim: f64,
    /// Random permutations per term (default 4999).
    pub permutations: u64,
    /// Upper limit when a term's permutations are extended near α (default 99 999).
    pub max_permutations: u64,
    /// Bootstrap resamples (default 1999).
    pub resamples: u64,
    /// Seed of every random stream (default 20240611, always printed).
    pub seed: u64,
    /// Worker threads (None: rayon's default). Never changes a result.
    pub threads: Option<usize>,
    /// Engine ids to run, in registry order.
    pub engines: Vec<String>,
    /// Hide progress bars.
    pub quiet: bool,
    /// Reference distribution of the trimmed engine's test (default F).
    pub wj_reference: WjReference,
    /// HC covariance type of the `hc` engine (default HC3).
    pub hc: HcType,
    /// Which points the sensitivity variant removes (default far-out points).
    pub drop_rule: DropRule,
    /// Permutation scheme of the `permutation` engine (default Freedman–Lane).
    pub permutation_scheme: PermutationScheme,
    /// Tail approximation for tiny permutation p-values (default off).
    pub tail_approximation: TailApproximation,
    /// `analyze --calibrate`: simulated datasets of the calibration on the data (None: off).
    pub calibration: Option<u64>,
    /// Multiplicity adjustment within each follow-up family (default Holm).
    pub adjust: crate::followup::Adjust,
    /// Weights of the `bootstrap` engine's wild bootstrap (default Rademacher).
    pub wild_weights: WildWeights,
    /// Primary engine fixed in advance (`--primary`, preregistration); None: chosen by
    /// the rules of METHODS §11.2 from the calibrated flags.
    pub primary: Option<String>,
    /// Which factors the interaction plot puts on its x axis and on its lines.
    pub plot_axes: PlotAxes,
}

/// How the `permutation` engine builds its permuted data (METHODS §3.1).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum PermutationScheme {
    /// Permute the residuals of the model without the term and add them back to its
    /// fitted values (Freedman & Lane 1983).
    #[default]
    FreedmanLane,
    /// Permute the residuals of the full model (ter Braak 1992).
    TerBraak,
    /// Permute the raw outcome across all cells (Manly 2007).
    Manly,
}

impl PermutationScheme {
    /// The id used on the command line and in the results (`mc.scheme`).
    pub fn id(self) -> &'static str {
        match self {
            PermutationScheme::FreedmanLane => "freedman-lane",
            PermutationScheme::TerBraak => "ter-braak",
            PermutationScheme::Manly => "manly",
        }
    }
}

/// Whether to add a generalized-Pareto tail approximation beside tiny permutation
/// p-values (METHODS §3.5).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum TailApproximation {
    /// Plain permutation p only.
    #[default]
    Off,
    /// Fit a generalized Pareto distribution to the largest resampled statistics when
    /// fewer than 10 exceed the observed one (Knijnenburg et al. 2009).
    GeneralizedPareto,
}

/// The default seed of every random stream (METHODS §10.2).
pub const DEFAULT_SEED: u64 = 20240611;

impl Default for Settings {
    fn default() -> Self {
        Settings {
            alpha: 0.05,
            ci_level: 0.95,
            ss_type: SsType::Three,
            trim: 0.2,
            permutations: 4999,
            max_permutations: 99_999,
            resamples: 1999,
            seed: DEFAULT_SEED,
            threads: None,
            engines: crate::engines::ids().iter().map(|s| s.to_string()).collect(),
            quiet: false,
            wj_reference: WjReference::F,
            hc: HcType::Hc3,
            drop_rule: DropRule::Far,
            permutation_scheme: PermutationScheme::FreedmanLane,
            tail_approximation: TailApproximation::Off,
            calibration: None,
            adjust: crate::followup::Adjust::Holm,
            wild_weights: WildWeights::Rademacher,
            primary: None,
            plot_axes: PlotAxes::default(),
        }
    }
}

/// Output format on standard output.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Format {
    /// Aligned text tables for people.
    Text,
    /// The `quorum.results/1` JSON object.
    Json,
    /// The per-engine, per-term results as CSV (guarded against formula injection).
    Csv,
    /// The report as Markdown (the same content as the text report, with its details).
    Markdown,
}

/// What to produce and where.
#[derive(Debug, Clone)]
pub struct OutputSpec {
    /// Format on standard output.
    pub format: Format,
    /// Report folder to write (results.json, report.txt, marker file).
    pub report_dir: Option<PathBuf>,
}

/// What the run does.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Job {
    /// Cell table, diagnostics, every engine on every term, concordance.
    Analyze,
    /// Cell table and diagnostics only.
    Describe,
    /// Follow-ups of chosen effects (`quorum probe`; run by `followup::probe`).
    Probe,
}

/// One complete, validated run.
#[derive(Debug, Clone)]
pub struct Config {
    /// Analyze or describe.
    pub job: Job,
    /// The data and how to read them.
    pub data: DataSpec,
    /// Engine settings.
    pub settings: Settings,
    /// Output.
    pub output: OutputSpec,
    /// The command line as typed, for the reproducibility block.
    pub command: String,
}

/// Which points the sensitivity variant of `analyze` removes before rerunning every
/// engine (DESIGN.md "Outlier rules and the sensitivity variant"; METHODS Overrides 9).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum DropRule {
    /// Tukey's far-out points: beyond 3 × IQR from the type-7 quartiles of their cell.
    #[default]
    Far,
    /// The MAD–median rule with a cut-off adjusted to the cell sizes, calibrated so that
    /// at most 5% of normal, equal-variance datasets lose a point.
    Mad,
    /// No sensitivity variant.
    None,
}

impl DropRule {
    /// The id used on the command line and in `sensitivity[].rule`.
    pub fn id(self) -> &'static str {
        match self {
            DropRule::Far => "far",
            DropRule::Mad => "mad",
            DropRule::None => "none",
        }
    }
}

/// `--axis FACTOR` and `--series FACTOR`: the factor on the x axis of the interaction
/// plot and the factor drawn as one line per level. Names are checked against the
/// design when the analysis starts (exit 2 for an unknown or repeated factor); `None`
/// takes the default of `diagnostics::plotdata::InteractionAxes::resolve`.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct PlotAxes {
    /// Factor on the x axis.
    pub axis: Option<String>,
    /// Factor drawn as one line per level.
    pub series: Option<String>,
}
