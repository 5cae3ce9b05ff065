//! Command-line flags (clap) and their validation into a library [`Config`].
//!
//! Two stages, so the library never sees clap: the raw flags below, then
//! [`Cli::into_config`] which checks ranges and names and builds typed values.

use clap::{Args, Parser, Subcommand, ValueEnum};
use quorum::config::{
    Config, DataSpec, Delimiter, Format, HcType, Job, OutputSpec, PermutationScheme, Settings, Source, SsType,
    TailApproximation, WildWeights, WjReference,
};
use quorum::error::{Error, Result};
use std::path::PathBuf;

/// Robust and nonparametric analysis of between-subjects factorial experiments.
#[derive(Debug, Parser)]
#[command(name = "quorum", version, about, long_about = None, propagate_version = true)]
pub struct Cli {
    /// What to do.
    #[command(subcommand)]
    pub command: Command,
}

/// Subcommands.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Test every main effect and interaction with every engine and compare the verdicts.
    Analyze(RunArgs),
    /// Cell table and diagnostics only (no tests).
    Describe(RunArgs),
    /// Analyze the invented demo data compiled into quorum and write a report folder.
    Demo(DemoArgs),
    /// Print a shell completion script (bash, zsh, fish, elvish, powershell).
    Completions {
        /// The shell.
        shell: clap_complete::Shell,
    },
    /// Print the manual page (roff) on standard output.
    Manpage,
    /// Simulated power and type-I error of every engine, for a design or for data like yours.
    Plan(crate::plan_cli::PlanArgs),
    /// Combine plan shards (`plan --shard K/N`) into one result.
    Merge(crate::plan_cli::MergeArgs),
    /// Probe effects: simple effects, pairwise comparisons, planned contrasts and trends.
    Probe(ProbeArgs),
}

/// Arguments of `probe`.
#[derive(Debug, Args)]
pub struct ProbeArgs {
    /// Data file in long format (as for `analyze`); `-` reads standard input.
    pub data: String,
    #[command(flatten)]
    pub columns: ColumnArgs,
    #[command(flatten)]
    pub reading: ReadingArgs,
    #[command(flatten)]
    pub engine: EngineArgs,
    /// Effect to probe: a factor, or factors joined by `:` for an interaction effect.
    #[arg(long, value_name = "A[:B]")]
    pub effect: Option<String>,
    /// Conditioning factors: the effect is tested within each level combination of these.
    #[arg(long, value_name = "B[,C]", value_delimiter = ',')]
    pub at: Vec<String>,
    /// Also probe the other way round (the --at factors at each level of the effect's).
    #[arg(long)]
    pub both_ways: bool,
    /// Planned contrast of one factor's marginal means, e.g. "dose: 1,-1,0" (repeatable).
    #[arg(long, value_name = "FACTOR: W1,W2,...")]
    pub contrast: Vec<String>,
    /// Orthogonal polynomial trends of a factor with numeric levels (repeatable).
    #[arg(long, value_name = "FACTOR")]
    pub trend: Vec<String>,
    /// Output format on standard output.
    #[arg(long, value_enum, default_value_t = ProbeFormatArg::Text)]
    pub format: ProbeFormatArg,
}

/// Output formats of `probe`.
#[derive(Debug, Clone, Copy, ValueEnum)]
pub enum ProbeFormatArg {
    /// Aligned text tables.
    Text,
    /// The quorum.probe/1 JSON object.
    Json,
}

/// Arguments of `analyze` and `describe`.
#[derive(Debug, Args)]
pub struct RunArgs {
    /// Data file in long format: CSV, TSV, semicolon-separated text, or a spreadsheet
    /// (.xlsx, .xls, .ods); `-` reads standard input.
    pub data: String,
    #[command(flatten)]
    pub columns: ColumnArgs,
    #[command(flatten)]
    pub reading: ReadingArgs,
    #[command(flatten)]
    pub engine: EngineArgs,
    #[command(flatten)]
    pub output: OutputArgs,
    #[command(flatten)]
    pub calibrate: crate::plan_cli::CalibrateArgs,
}

/// Arguments of `demo`.
#[derive(Debug, Args)]
pub struct DemoArgs {
    #[command(flatten)]
    pub engine: EngineArgs,
    /// Output format on standard output.
    #[arg(long, value_enum, default_value_t = FormatArg::Text)]
    pub format: FormatArg,
    /// Report folder to write (made by quorum or empty).
    #[arg(long, value_name = "DIR", default_value = quorum::demo::DEFAULT_FOLDER)]
    pub report: PathBuf,
    /// No progress bars.
    #[arg(long)]
    pub quiet: bool,
    /// Text output: add every engine's details below the summary sections.
    #[arg(long)]
    pub details: bool,
}

/// Which columns play which role.
#[derive(Debug, Args)]
pub struct ColumnArgs {
    /// Outcome column (the measured response).
    #[arg(short = 'y', long, value_name = "COL")]
    pub outcome: String,
    /// Factor columns, comma-separated (1 to 6); their order names the interaction terms.
    #[arg(short = 'f', long, value_name = "A,B,...", value_delimiter = ',', required = true)]
    pub factors: Vec<String>,
    /// Participant-id column: a repeated id stops the analysis (one row per participant).
    #[arg(long, value_name = "COL")]
    pub id: Option<String>,
    /// Level order of a factor, e.g. `--levels dose=low,mid,high` (repeatable).
    #[arg(long, value_name = "FACTOR=L1,L2,...")]
    pub levels: Vec<String>,
    /// Factors that are measured (e.g. age group) rather than manipulated; enables generalized η².
    #[arg(long, value_name = "A,B", value_delimiter = ',')]
    pub measured: Vec<String>,
}

/// How to read the file.
#[derive(Debug, Args)]
pub struct ReadingArgs {
    /// Tokens that mark a missing value, comma-separated (default: NA, empty, `.`, NaN).
    #[arg(long, value_name = "TOKENS", value_delimiter = ',', allow_hyphen_values = true)]
    pub missing: Option<Vec<String>>,
    /// Field delimiter: auto, comma, tab, semicolon, or one character.
    #[arg(long, value_name = "D", default_value = "auto")]
    pub delimiter: String,
    /// Numbers use a decimal comma (`7,5`).
    #[arg(long)]
    pub decimal_comma: bool,
    /// Spreadsheet sheet to read (.xlsx, .xls, .ods): a name or a 1-based position.
    #[arg(long, value_name = "NAME|INDEX")]
    pub sheet: Option<String>,
}

/// Settings shared by the engines.
#[derive(Debug, Args)]
pub struct EngineArgs {
    /// Sum-of-squares type of the classical table (verdicts always use Type III).
    #[arg(long, value_name = "1|2|3", default_value_t = 3, value_parser = clap::value_parser!(u8).range(1..=3))]
    pub ss: u8,
    /// Significance level for decisions.
    #[arg(long, default_value_t = 0.05)]
    pub alpha: f64,
    /// Confidence level of intervals.
    #[arg(long, default_value_t = 0.95)]
    pub ci_level: f64,
    /// Trimming proportion for trimmed means, in [0, 0.5).
    #[arg(long, default_value_t = 0.2)]
    pub trim: f64,
    /// Random permutations per term.
    #[arg(long, default_value_t = 4999)]
    pub permutations: u64,
    /// Upper limit when permutations are extended because p is close to alpha.
    #[arg(long, default_value_t = 99_999)]
    pub max_permutations: u64,
    /// Bootstrap resamples.
    #[arg(long, default_value_t = 1999)]
    pub resamples: u64,
    /// Seed of every random stream (always printed).
    #[arg(long, default_value_t = quorum::config::DEFAULT_SEED)]
    pub seed: u64,
    /// Worker threads (results never depend on it).
    #[arg(long)]
    pub threads: Option<usize>,
    /// Engines to run, comma-separated (default: all).
    #[arg(long, value_name = "IDS", value_delimiter = ',')]
    pub engines: Option<Vec<String>>,
    /// Reference distribution of the trimmed-means Welch–James test.
    #[arg(long, value_enum, default_value_t = WjReferenceArg::F)]
    pub wj_reference: WjReferenceArg,
    /// Heteroscedasticity-consistent covariance of the `hc` engine: 0, 1, 2, 3 or 4.
    #[arg(long, value_name = "0-4", default_value_t = 3, value_parser = clap::value_parser!(u8).range(0..=4))]
    pub hc: u8,
    /// Points the sensitivity variant removes: far (beyond 3 × IQR), mad (calibrated MAD–median rule), none.
    #[arg(long, value_enum, default_value_t = DropRuleArg::Far)]
    pub drop_rule: DropRuleArg,
    /// How the permutation engine permutes: residuals of the model without the term
    /// (freedman-lane), full-model residuals (ter-braak) or the raw outcome (manly).
    #[arg(long, value_enum, default_value_t = SchemeArg::FreedmanLane)]
    pub permutation_scheme: SchemeArg,
    /// Add a generalized-Pareto tail approximation beside permutation p-values below
    /// about 10/B (reported next to the plain p, never instead of it).
    #[arg(long)]
    pub tail_approximation: bool,
    /// Multiplicity adjustment within each follow-up family.
    #[arg(long, value_enum, default_value_t = AdjustArg::Holm)]
    pub adjust: AdjustArg,
    /// Weights of the bootstrap engine's wild bootstrap test.
    #[arg(long, value_enum, default_value_t = WildWeightsArg::Rademacher)]
    pub wild_weights: WildWeightsArg,
    /// Fix the primary engine in advance (preregistration) instead of letting the
    /// pre-specified rules choose it from the calibrated diagnostics.
    #[arg(long, value_name = "ENGINE")]
    pub primary: Option<String>,
}

/// Multiplicity adjustments of follow-up families.
#[derive(Debug, Clone, Copy, ValueEnum)]
pub enum AdjustArg {
    /// Holm step-down (familywise error, any dependence).
    Holm,
    /// Hochberg step-up (familywise error, independent or positively dependent tests).
    Hochberg,
    /// Benjamini–Hochberg (false discovery rate).
    Bh,
    /// Bonferroni.
    Bonferroni,
    /// No adjustment.
    None,
}

impl From<AdjustArg> for quorum::followup::Adjust {
    fn from(a: AdjustArg) -> Self {
        use quorum::followup::Adjust;
        match a {
            AdjustArg::Holm => Adjust::Holm,
            AdjustArg::Hochberg => Adjust::Hochberg,
            AdjustArg::Bh => Adjust::Bh,
            AdjustArg::Bonferroni => Adjust::Bonferroni,
            AdjustArg::None => Adjust::None,
        }
    }
}

/// Wild-bootstrap weight distributions.
#[derive(Debug, Clone, Copy, ValueEnum)]
pub enum WildWeightsArg {
    /// ±1 with probability ½ each.
    Rademacher,
    /// Mammen's two-point weights (third moment 1).
    Mammen,
}

impl From<WildWeightsArg> for WildWeights {
    fn from(w: WildWeightsArg) -> WildWeights {
        match w {
            WildWeightsArg::Rademacher => WildWeights::Rademacher,
            WildWeightsArg::Mammen => WildWeights::Mammen,
        }
    }
}

/// Reference distributions of the trimmed-means test.
#[derive(Debug, Clone, Copy, ValueEnum)]
pub enum WjReferenceArg {
    /// Q/c_J against F(q, ν₂) (Johansen).
    F,
    /// Q against the adjusted χ² critical value.
    Adjusted,
    /// Q against its bootstrap distribution (centred cells, --resamples).
    Bootstrap,
}

impl From<WjReferenceArg> for WjReference {
    fn from(r: WjReferenceArg) -> WjReference {
        match r {
            WjReferenceArg::F => WjReference::F,
            WjReferenceArg::Adjusted => WjReference::Adjusted,
            WjReferenceArg::Bootstrap => WjReference::Bootstrap,
        }
    }
}

/// Removal rules of the sensitivity variant.
#[derive(Debug, Clone, Copy, ValueEnum)]
pub enum DropRuleArg {
    /// Tukey's far-out points (beyond 3 × IQR from the quartiles).
    Far,
    /// MAD–median rule with a cut-off calibrated to the cell sizes.
    Mad,
    /// No sensitivity variant.
    None,
}

impl From<DropRuleArg> for quorum::config::DropRule {
    fn from(d: DropRuleArg) -> Self {
        match d {
            DropRuleArg::Far => quorum::config::DropRule::Far,
            DropRuleArg::Mad => quorum::config::DropRule::Mad,
            DropRuleArg::None => quorum::config::DropRule::None,
        }
    }
}

/// Permutation schemes (METHODS §3.1).
#[derive(Debug, Clone, Copy, ValueEnum)]
pub enum SchemeArg {
    /// Freedman & Lane (1983): residuals of the model without the term.
    FreedmanLane,
    /// ter Braak (1992): residuals of the full model.
    TerBraak,
    /// Manly (2007): the raw outcome.
    Manly,
}

impl From<SchemeArg> for PermutationScheme {
    fn from(s: SchemeArg) -> PermutationScheme {
        match s {
            SchemeArg::FreedmanLane => PermutationScheme::FreedmanLane,
            SchemeArg::TerBraak => PermutationScheme::TerBraak,
            SchemeArg::Manly => PermutationScheme::Manly,
        }
    }
}

/// Where results go.
#[derive(Debug, Args)]
pub struct OutputArgs {
    /// Output format on standard output.
    #[arg(long, value_enum, default_value_t = FormatArg::Text)]
    pub format: FormatArg,
    /// Also write a report folder (report.html, plots/*.svg, report.md, report.txt, results.json, CSV tables).
    #[arg(long, value_name = "DIR")]
    pub report: Option<PathBuf>,
    /// No progress bars.
    #[arg(long)]
    pub quiet: bool,
    /// Text output: add every engine's details below the summary sections.
    #[arg(long)]
    pub details: bool,
    /// Factor on the x axis of the interaction plot (default: the factor with most levels).
    #[arg(long, value_name = "FACTOR")]
    pub axis: Option<String>,
    /// Factor drawn as one line per level in the interaction plot (default: the first other factor).
    #[arg(long, value_name = "FACTOR")]
    pub series: Option<String>,
}

impl OutputArgs {
    /// The interaction plot's axes as given (checked against the design later).
    pub fn plot_axes(&self) -> quorum::config::PlotAxes {
        let name = |s: &Option<String>| s.as_ref().map(|s| s.trim().to_string());
        quorum::config::PlotAxes { axis: name(&self.axis), series: name(&self.series) }
    }
}

/// Output formats.
#[derive(Debug, Clone, Copy, ValueEnum)]
pub enum FormatArg {
    /// Aligned text tables.
    Text,
    /// The quorum.results/1 JSON object.
    Json,
    /// The per-engine, per-term results as CSV.
    Csv,
    /// The full report as Markdown.
    Markdown,
}

impl From<FormatArg> for Format {
    fn from(f: FormatArg) -> Format {
        match f {
            FormatArg::Text => Format::Text,
            FormatArg::Json => Format::Json,
            FormatArg::Csv => Format::Csv,
            FormatArg::Markdown => Format::Markdown,
        }
    }
}

impl Cli {
    /// Whether the text report should carry every engine's details (`--details`).
    pub fn details(&self) -> bool {
        match &self.command {
            Command::Analyze(a) | Command::Describe(a) => a.output.details,
            Command::Demo(d) => d.details,
            _ => false,
        }
    }

    /// Validates the flags into a run configuration.
    ///
    /// # Errors
    /// A usage error (exit 2) naming the flag and what to do.
    pub fn into_config(self, command: String) -> Result<Config> {
        match self.command {
            Command::Analyze(a) => run_config(a, Job::Analyze, command),
            Command::Describe(a) => run_config(a, Job::Describe, command),
            Command::Completions { .. } | Command::Manpage | Command::Probe(_) => {
                Err(Error::usage("this command writes no analysis", "it is handled before the analysis starts"))
            }
            Command::Demo(d) => {
                let mut settings = settings(&d.engine)?;
                settings.quiet = d.quiet;
                Ok(quorum::demo::config(settings, d.format.into(), Some(d.report)))
            }
            Command::Plan(_) | Command::Merge(_) => {
                Err(Error::internal("plan and merge are not analysis runs (main dispatches them first)"))
            }
        }
    }
}

impl ProbeArgs {
    /// Validates the flags of `probe` into a run configuration and a probe specification.
    ///
    /// # Errors
    /// A usage error (exit 2) naming the flag and what to do.
    pub fn into_config(self, command: String) -> Result<(Config, quorum::followup::ProbeSpec)> {
        let format = match self.format {
            ProbeFormatArg::Text => Format::Text,
            ProbeFormatArg::Json => Format::Json,
        };
        let run = RunArgs {
            data: self.data,
            columns: self.columns,
            reading: self.reading,
            engine: self.engine,
            output: OutputArgs {
                format: FormatArg::Text,
                report: None,
                quiet: true,
                details: false,
                axis: None,
                series: None,
            },
            calibrate: crate::plan_cli::CalibrateArgs { calibrate: false, calibrate_sims: 0 },
        };
        let mut config = run_config(run, Job::Probe, command)?;
        config.output.format = format;
        let mut contrasts = Vec::new();
        for c in &self.contrast {
            contrasts.push(quorum::followup::ContrastSpec::parse(c)?);
        }
        let effect = match &self.effect {
            Some(e) => e.split(':').map(|s| s.trim().to_string()).collect(),
            None => Vec::new(),
        };
        let spec = quorum::followup::ProbeSpec {
            effect,
            at: self.at.iter().map(|s| s.trim().to_string()).collect(),
            both_ways: self.both_ways,
            contrasts,
            trends: self.trend.iter().map(|s| s.trim().to_string()).collect(),
        };
        Ok((config, spec))
    }
}

fn run_config(a: RunArgs, job: Job, command: String) -> Result<Config> {
    let source = if a.data == "-" { Source::Stdin } else { Source::File(PathBuf::from(&a.data)) };
    let levels = a.columns.levels.iter().map(|l| parse_levels(l)).collect::<Result<Vec<_>>>()?;
    let data = DataSpec {
        source,
        outcome: a.columns.outcome,
        factors: a.columns.factors.iter().map(|f| f.trim().to_string()).collect(),
        id: a.columns.id,
        missing: a.reading.missing.unwrap_or_else(DataSpec::default_missing),
        delimiter: parse_delimiter(&a.reading.delimiter)?,
        decimal_comma: a.reading.decimal_comma,
        levels,
        measured: a.columns.measured.iter().map(|f| f.trim().to_string()).collect(),
        sheet: a.reading.sheet,
    };
    let mut settings = settings(&a.engine)?;
    settings.quiet = a.output.quiet;
    settings.calibration = a.calibrate.sims(job == Job::Analyze)?;
    settings.plot_axes = a.output.plot_axes();
    Ok(Config {
        job,
        data,
        settings,
        output: OutputSpec { format: a.output.format.into(), report_dir: a.output.report },
        command,
    })
}

pub(crate) fn settings(e: &EngineArgs) -> Result<Settings> {
    let in_open_unit = |x: f64| x > 0.0 && x < 1.0;
    if !in_open_unit(e.alpha) {
        return Err(Error::usage(format!("--alpha {} is not between 0 and 1", e.alpha), "the usual value is 0.05"));
    }
    if !in_open_unit(e.ci_level) {
        return Err(Error::usage(
            format!("--ci-level {} is not between 0 and 1", e.ci_level),
            "the usual value is 0.95",
        ));
    }
    if !(0.0..0.5).contains(&e.trim) {
        return Err(Error::usage(
            format!("--trim {} is outside [0, 0.5)", e.trim),
            "the usual value is 0.2; 0 gives untrimmed means",
        ));
    }
    for (name, v) in
        [("--permutations", e.permutations), ("--resamples", e.resamples), ("--max-permutations", e.max_permutations)]
    {
        if v == 0 || v >= 1 << 62 {
            return Err(Error::usage(format!("{name} {v} is out of range"), "give a positive count, e.g. 4999"));
        }
    }
    if e.threads == Some(0) {
        return Err(Error::usage("--threads 0", "give at least one thread, or leave it out"));
    }
    let known = quorum::engines::ids();
    let engines: Vec<String> = match &e.engines {
        None => known.iter().map(|s| s.to_string()).collect(),
        Some(list) => {
            for id in list {
                if !known.contains(&id.trim()) {
                    return Err(Error::usage(
                        format!("unknown engine `{}`", id.trim()),
                        format!("the engines are {}", known.join(", ")),
                    ));
                }
            }
            known.iter().filter(|k| list.iter().any(|id| id.trim() == **k)).map(|s| s.to_string()).collect()
        }
    };
    let primary = primary_engine(e.primary.as_deref(), &engines)?;
    Ok(Settings {
        alpha: e.alpha,
        ci_level: e.ci_level,
        ss_type: match e.ss {
            1 => SsType::One,
            2 => SsType::Two,
            _ => SsType::Three,
        },
        trim: e.trim,
        permutations: e.permutations,
        max_permutations: e.max_permutations.max(e.permutations),
        resamples: e.resamples,
        seed: e.seed,
        threads: e.threads,
        engines,
        quiet: false,
        wj_reference: e.wj_reference.into(),
        hc: HcType::ALL[usize::from(e.hc.min(4))],
        drop_rule: e.drop_rule.into(),
        permutation_scheme: e.permutation_scheme.into(),
        tail_approximation: if e.tail_approximation {
            TailApproximation::GeneralizedPareto
        } else {
            TailApproximation::Off
        },
        calibration: None,
        adjust: e.adjust.into(),
        wild_weights: e.wild_weights.into(),
        primary,
        plot_axes: quorum::config::PlotAxes::default(),
    })
}

/// `--primary`: a known engine id that is among the engines to run.
fn primary_engine(primary: Option<&str>, engines: &[String]) -> Result<Option<String>> {
    let Some(id) = primary.map(str::trim) else {
        return Ok(None);
    };
    let known = quorum::engines::ids();
    if !known.contains(&id) {
        return Err(Error::usage(
            format!("--primary `{id}` is not an engine"),
            format!("the engines are {}", known.join(", ")),
        ));
    }
    if !engines.iter().any(|e| e == id) {
        return Err(Error::usage(
            format!("--primary `{id}` is not among the engines to run ({})", engines.join(", ")),
            format!("add `{id}` to --engines, or fix another engine as primary"),
        ));
    }
    Ok(Some(id.to_string()))
}

fn parse_levels(arg: &str) -> Result<(String, Vec<String>)> {
    let Some((factor, list)) = arg.split_once('=') else {
        return Err(Error::usage(
            format!("--levels `{arg}` has no `=`"),
            "write it as --levels FACTOR=level1,level2,...",
        ));
    };
    let levels: Vec<String> = list.split(',').map(str::to_string).collect();
    if levels.len() < 2 {
        return Err(Error::usage(
            format!("--levels `{arg}` lists fewer than two levels"),
            "list every level of the factor in order",
        ));
    }
    Ok((factor.trim().to_string(), levels))
}

pub(crate) fn parse_delimiter(arg: &str) -> Result<Delimiter> {
    Ok(match arg {
        "auto" => Delimiter::Auto,
        "comma" | "," => Delimiter::Byte(b','),
        "tab" | "\\t" | "\t" => Delimiter::Byte(b'\t'),
        "semicolon" | ";" => Delimiter::Byte(b';'),
        other
            if other.len() == 1
                && other.is_ascii()
                && !other.as_bytes()[0].is_ascii_alphanumeric()
                && other != "\"" =>
        {
            Delimiter::Byte(other.as_bytes()[0])
        }
        other => {
            return Err(Error::usage(
                format!("--delimiter `{other}` is not a delimiter quorum can use"),
                "use auto, comma, tab, semicolon, or a single punctuation character",
            ))
        }
    })
}
