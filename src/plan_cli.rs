//! Flags of `quorum plan`, `quorum merge` and `analyze --calibrate`, validated into the
//! library's [`PlanConfig`] and [`MergeConfig`]; the two commands' glue (run, print,
//! write the report folder). Kept beside `cli.rs` so that the shared flag file only
//! gains two subcommand lines.

use crate::cli::{parse_delimiter, settings, EngineArgs, FormatArg, ReadingArgs};
use clap::Args;
use quorum::config::{DataSpec, Format, OutputSpec, Source};
use quorum::error::{Error, Result};
use quorum::plan::scenario::{self, DesignedSpec, MeanSpec};
use quorum::plan::{self, MergeConfig, PlanConfig, PlanSource, Sizes};
use std::io::{self, Write};
use std::path::PathBuf;

/// Arguments of `plan`.
#[derive(Debug, Args)]
pub struct PlanArgs {
    /// Designed scenario: levels of each factor joined by x (factors A, B, C, … with
    /// levels a1, a2, …), e.g. `3x2`.
    #[arg(long, value_name = "AxB[xC…]", conflicts_with = "like")]
    pub design: Option<String>,
    /// Calibrate on your own data instead: resample each cell's residuals under each
    /// engine's null (long format, as for `analyze`).
    #[arg(long, value_name = "DATA")]
    pub like: Option<String>,
    /// Outcome column of the --like data.
    #[arg(short = 'y', long, value_name = "COL", requires = "like")]
    pub outcome: Option<String>,
    /// Factor columns of the --like data, comma-separated.
    #[arg(short = 'f', long, value_name = "A,B,...", value_delimiter = ',', requires = "like")]
    pub factors: Vec<String>,
    #[command(flatten)]
    pub reading: ReadingArgs,
    /// Observations per cell: one n for every cell, or one per cell in cell order (last
    /// factor fastest). With --like, the default is the data's own cell sizes.
    #[arg(long, value_name = "N|N1,N2,...", value_delimiter = ',')]
    pub n: Option<Vec<usize>>,
    /// Several equal cell sizes, for power curves, e.g. 10,20,40,80.
    #[arg(long, value_name = "N1,N2,...", value_delimiter = ',', conflicts_with = "n")]
    pub n_grid: Option<Vec<usize>>,
    /// Standardized effect of a term: Cohen's f of its cell-mean component, in units of
    /// the root-mean-square error SD, linear pattern over the levels (repeatable), e.g.
    /// `--effect A=0.25 --effect A:B=0.1`.
    #[arg(long = "effect", value_name = "TERM=F", conflicts_with = "means")]
    pub effects: Vec<String>,
    /// Cell means in SD units, one per cell in cell order (last factor fastest).
    #[arg(long, value_name = "M1,M2,...", value_delimiter = ',', allow_hyphen_values = true)]
    pub means: Option<Vec<f64>>,
    /// Error distribution: normal, lognormal[:SIGMA], t:DF, skew-normal[:SHAPE], or
    /// likert[:ITEMS] (a 1–7 rating composite).
    #[arg(long, value_name = "DIST", default_value = "normal")]
    pub errors: String,
    /// Ratio of the cells' error SDs, one per cell in cell order, e.g. 1,1,2,2,4,4.
    #[arg(long, value_name = "R1,R2,...", value_delimiter = ',')]
    pub sd_ratio: Option<Vec<f64>>,
    /// Simulated datasets per condition and sample size.
    #[arg(long, default_value_t = plan::DEFAULT_SIMS)]
    pub sims: u64,
    /// Run only the K-th of N equal slices of the simulations (batch clusters); merge
    /// the JSON outputs with `quorum merge`.
    #[arg(long, value_name = "K/N")]
    pub shard: Option<String>,
    /// Stop at the last checkpoint before this many seconds and report what ran.
    #[arg(long, value_name = "SECONDS")]
    pub max_time: Option<f64>,
    #[command(flatten)]
    pub engine: EngineArgs,
    /// Output format on standard output (default: text; json with --shard).
    #[arg(long, value_enum)]
    pub format: Option<FormatArg>,
    /// Also write a report folder (results.json, report.txt, plots/*.svg).
    #[arg(long, value_name = "DIR")]
    pub report: Option<PathBuf>,
    /// No progress bar.
    #[arg(long)]
    pub quiet: bool,
}

/// Arguments of `merge`.
#[derive(Debug, Args)]
pub struct MergeArgs {
    /// Plan results or shards to combine (JSON).
    #[arg(required = true, value_name = "FILES")]
    pub files: Vec<PathBuf>,
    /// Output format on standard output.
    #[arg(long, value_enum, default_value_t = FormatArg::Text)]
    pub format: FormatArg,
    /// Also write a report folder (results.json, report.txt, plots/*.svg).
    #[arg(long, value_name = "DIR")]
    pub report: Option<PathBuf>,
}

/// `analyze --calibrate`.
#[derive(Debug, Args)]
pub struct CalibrateArgs {
    /// Add a calibration on these data: each engine's rejection rate under its own null,
    /// simulated by resampling the cells' residuals (like `quorum plan --like`).
    #[arg(long)]
    pub calibrate: bool,
    /// Simulated datasets of --calibrate.
    #[arg(long, value_name = "N", default_value_t = plan::CALIBRATION_SIMS, requires = "calibrate")]
    pub calibrate_sims: u64,
}

impl CalibrateArgs {
    /// The number of calibration datasets, if asked for.
    ///
    /// # Errors
    /// A usage error for `describe --calibrate` or a zero count.
    pub fn sims(&self, analyze: bool) -> Result<Option<u64>> {
        if !self.calibrate {
            return Ok(None);
        }
        if !analyze {
            return Err(Error::usage("--calibrate needs tests to calibrate", "use it with `quorum analyze`"));
        }
        if self.calibrate_sims == 0 || self.calibrate_sims > plan::MAX_SIMS {
            return Err(Error::usage(
                format!("--calibrate-sims {} is out of range", self.calibrate_sims),
                "give a positive count, e.g. 500",
            ));
        }
        Ok(Some(self.calibrate_sims))
    }
}

impl PlanArgs {
    /// Validates the flags.
    ///
    /// # Errors
    /// A usage error naming the flag.
    pub fn into_config(self, command: String) -> Result<PlanConfig> {
        let mut settings = settings(&self.engine)?;
        settings.quiet = self.quiet;
        let sizes = match (&self.n, &self.n_grid) {
            (_, Some(grid)) => Sizes::Equal(grid.clone()),
            (Some(n), None) if n.len() == 1 => Sizes::Equal(n.clone()),
            (Some(n), None) => Sizes::PerCell(n.clone()),
            (None, None) => Sizes::Data,
        };
        let source = match (&self.design, &self.like) {
            (Some(d), None) => {
                let means = match (&self.means, self.effects.is_empty()) {
                    (Some(m), _) => MeanSpec::Means(m.clone()),
                    (None, false) => MeanSpec::Effects(
                        self.effects.iter().map(|e| scenario::parse_effect(e)).collect::<Result<_>>()?,
                    ),
                    (None, true) => MeanSpec::Zero,
                };
                PlanSource::Designed(DesignedSpec {
                    shape: scenario::parse_design(d)?,
                    means,
                    errors: scenario::parse_errors(&self.errors)?,
                    sd_ratio: self.sd_ratio.clone(),
                })
            }
            (None, Some(data)) => {
                if !self.effects.is_empty()
                    || self.means.is_some()
                    || self.sd_ratio.is_some()
                    || self.errors != "normal"
                {
                    return Err(Error::usage(
                        "--effect, --means, --sd-ratio and --errors describe a designed scenario, not --like data",
                        "--like keeps the data's own shapes and spreads; use --design for a scenario",
                    ));
                }
                let Some(outcome) = self.outcome.clone() else {
                    return Err(Error::usage("--like needs the outcome column", "add -y COL"));
                };
                if self.factors.is_empty() {
                    return Err(Error::usage("--like needs the factor columns", "add -f A,B"));
                }
                let source = if data == "-" { Source::Stdin } else { Source::File(PathBuf::from(data)) };
                let mut spec = DataSpec::new(source, &outcome, &[]);
                spec.factors = self.factors.iter().map(|f| f.trim().to_string()).collect();
                spec.missing = self.reading.missing.clone().unwrap_or_else(DataSpec::default_missing);
                spec.delimiter = parse_delimiter(&self.reading.delimiter)?;
                spec.decimal_comma = self.reading.decimal_comma;
                spec.sheet = self.reading.sheet.clone();
                PlanSource::Like(spec)
            }
            _ => {
                return Err(Error::usage(
                    "plan needs a scenario",
                    "give --design 3x2 --n 20 (with --effect or --means for power) or --like DATA -y COL -f A,B",
                ))
            }
        };
        let shard = self.shard.as_deref().map(plan::parse_shard).transpose()?;
        let format = match self.format {
            Some(f) => f.into(),
            None if shard.is_some() => Format::Json,
            None => Format::Text,
        };
        Ok(PlanConfig {
            source,
            sizes,
            sims: self.sims,
            settings,
            shard,
            max_time: self.max_time,
            output: OutputSpec { format, report_dir: self.report },
            command,
        })
    }
}

fn finish(report: &plan::result::PlanReport, output: &OutputSpec, input: Option<PathBuf>) -> Result<()> {
    let mut stdout = io::stdout().lock();
    plan::write_outputs(report, output, input.as_deref(), &mut stdout)?;
    let _ = stdout.flush();
    if let (Some(dir), Format::Text) = (&output.report_dir, output.format) {
        eprintln!("report folder: {}/", dir.display());
    }
    Ok(())
}

/// `quorum plan`.
///
/// # Errors
/// As [`plan::run`].
pub fn plan(args: PlanArgs, command: String) -> Result<()> {
    let config = args.into_config(command)?;
    let input = match &config.source {
        PlanSource::Like(d) => match &d.source {
            Source::File(p) => Some(p.clone()),
            _ => None,
        },
        PlanSource::Designed(_) => None,
    };
    let report = plan::run(&config)?;
    finish(&report, &config.output, input)
}

/// `quorum merge`.
///
/// # Errors
/// As [`plan::merge_files`].
pub fn merge(args: MergeArgs, command: String) -> Result<()> {
    let config = MergeConfig {
        files: args.files,
        output: OutputSpec { format: args.format.into(), report_dir: args.report },
        command,
    };
    let report = plan::merge_files(&config)?;
    finish(&report, &config.output, None)
}
