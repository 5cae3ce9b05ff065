//! Planning and calibration: simulated power and type-I error of every engine.
//!
//! Two sources of datasets share one simulation loop ([`simulate`]):
//!
//! * a **designed scenario** (`quorum plan --design 3x2 --n 20 …`, [`scenario`]): cell
//!   means from standardized term effects or given directly, an error distribution
//!   ([`draws`]) and cell SD ratios, simulated under the null (every cell at the same
//!   mean) and under the effects, at one or several sample sizes;
//! * the user's **own data** (`quorum plan --like DATA …`, [`like`]): residuals resampled
//!   within cells about the estimand each engine tests, so each engine is judged under
//!   its own null with the data's shapes and spreads.
//!
//! Each simulated dataset becomes a [`Design`] and a
//! [`Fit`](crate::model::Fit) with Type III forms, and every engine of the registry that
//! was selected runs on it through the [`Engine`] trait, so
//! engines added to the registry appear in plans without changes here. Only integer
//! counts leave a simulation ([`result`]), which is what makes `--shard K/N` and
//! `quorum merge` give exactly the numbers of one run. The text renderer is [`text`],
//! the SVG plots are [`plots`].

pub mod draws;
pub mod like;
pub mod plots;
pub mod progress;
pub mod result;
pub mod scenario;
pub mod simulate;
pub mod text;

use crate::config::{DataSpec, Format, OutputSpec, Settings, SsType};
use crate::design::forms::SsForms;
use crate::design::{Design, Layout};
use crate::engines::{self, Engine};
use crate::error::{Error, Result};
use result::{
    CellSpec, ConditionSpec, Coverage, DataSummary, ErrorsSummary, FactorLevels, GridPoint, Noncentrality, PlanReport,
    PlanReproducibility, PlanSpec, RateRow, TermEffect,
};
use scenario::{DesignedSpec, Family, RateKind, Scenario};
use serde::Serialize;
use serde_json::json;
use simulate::{Condition, Generator, Plan};
use std::collections::BTreeMap;
use std::io::Write;
use std::path::{Path, PathBuf};

/// Default number of simulations.
pub const DEFAULT_SIMS: u64 = 1000;

/// Largest number of simulations accepted.
pub const MAX_SIMS: u64 = 1 << 40;

/// Where the datasets come from.
#[derive(Debug, Clone)]
pub enum PlanSource {
    /// A designed scenario.
    Designed(DesignedSpec),
    /// The user's data (`--like`).
    Like(DataSpec),
}

/// Cell sizes.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Sizes {
    /// The data's own cell sizes (`--like` without `--n`).
    Data,
    /// Every cell the same n, at each of these values (`--n 20`, `--n-grid 10,20,40`).
    Equal(Vec<usize>),
    /// One n per cell, cell order (`--n 20,20,15,15,10,10`).
    PerCell(Vec<usize>),
}

/// A slice of the simulations: the K-th of N (1-based).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Shard {
    /// K, 1 ≤ K ≤ N.
    pub index: u64,
    /// N.
    pub count: u64,
}

impl Shard {
    /// Simulations ⌊(K − 1)S/N⌋ … ⌊KS/N⌋ − 1 of S.
    pub fn range(&self, sims: u64) -> (u64, u64) {
        let at = |k: u64| ((k as u128 * sims as u128) / self.count as u128) as u64;
        (at(self.index - 1), at(self.index))
    }
}

/// Parses `K/N`.
///
/// # Errors
/// A usage error unless 1 ≤ K ≤ N.
pub fn parse_shard(text: &str) -> Result<Shard> {
    let hint = "write --shard K/N with 1 ≤ K ≤ N, e.g. --shard 3/10 for the third of ten slices";
    let parsed =
        text.split_once('/').and_then(|(k, n)| Some((k.trim().parse::<u64>().ok()?, n.trim().parse::<u64>().ok()?)));
    match parsed {
        Some((k, n)) if k >= 1 && k <= n => Ok(Shard { index: k, count: n }),
        _ => Err(Error::usage(format!("--shard `{text}` is not K/N with 1 ≤ K ≤ N"), hint)),
    }
}

/// One validated `quorum plan` run.
#[derive(Debug, Clone)]
pub struct PlanConfig {
    /// Designed scenario or data.
    pub source: PlanSource,
    /// Cell sizes.
    pub sizes: Sizes,
    /// Simulations per condition and sample size.
    pub sims: u64,
    /// Engine settings (engines, α, trimming, resamples, seed, threads, quiet).
    pub settings: Settings,
    /// Run only this slice.
    pub shard: Option<Shard>,
    /// Stop at the checkpoint before this many seconds would be exceeded.
    pub max_time: Option<f64>,
    /// Output format and report folder.
    pub output: OutputSpec,
    /// The command as typed.
    pub command: String,
}

/// One validated `quorum merge` run.
#[derive(Debug, Clone)]
pub struct MergeConfig {
    /// Plan results or shards to merge.
    pub files: Vec<PathBuf>,
    /// Output format and report folder.
    pub output: OutputSpec,
    /// The command as typed.
    pub command: String,
}

fn grid_label(n: &[usize]) -> String {
    if n.iter().all(|&v| v == n[0]) {
        n[0].to_string()
    } else {
        n.iter().map(|v| v.to_string()).collect::<Vec<_>>().join(",")
    }
}

fn resolve_grid(sizes: &Sizes, cells: usize, data: Option<&[usize]>) -> Result<Vec<Vec<usize>>> {
    let grid = match sizes {
        Sizes::Data => match data {
            Some(n) => vec![n.to_vec()],
            None => {
                return Err(Error::usage("a designed plan needs --n", "give --n 20 (per cell) or --n-grid 10,20,40"))
            }
        },
        Sizes::Equal(values) => values.iter().map(|&v| vec![v; cells]).collect(),
        Sizes::PerCell(list) => {
            if list.len() != cells {
                return Err(Error::usage(
                    format!("--n gives {} sizes for {cells} cells", list.len()),
                    "give one n for every cell (cell order, last factor fastest) or a single n",
                ));
            }
            vec![list.clone()]
        }
    };
    if grid.is_empty() {
        return Err(Error::usage("no sample size given", "give --n or --n-grid"));
    }
    if let Some(bad) = grid.iter().flatten().find(|&&v| !(2..=1_000_000).contains(&v)) {
        return Err(Error::usage(
            format!("a cell size of {bad} cannot be simulated"),
            "every cell needs 2 to 1 000 000 observations",
        ));
    }
    Ok(grid)
}

/// The hypothesis of an engine in words.
fn hypothesis(family: Family) -> &'static str {
    match family {
        Family::Means => "equal means (Type III contrast)",
        Family::TrimmedMeans => "equal trimmed means (Type III contrast)",
        Family::AlignedLocation => "no effect on the aligned ranks (location-shift model)",
        Family::Distributions => "equal distribution functions (relative effects)",
        Family::Unknown => "the engine's own null",
    }
}

fn selected_engines(settings: &Settings) -> Vec<Box<dyn Engine>> {
    engines::registry().into_iter().filter(|e| settings.engines.iter().any(|id| id == e.id())).collect()
}

/// Settings as every simulated dataset uses them: no Monte Carlo extension, no bars.
fn dataset_settings(settings: &Settings) -> Settings {
    Settings { max_permutations: settings.permutations, quiet: true, threads: None, ..settings.clone() }
}

fn engine_settings(settings: &Settings) -> BTreeMap<String, serde_json::Value> {
    let mut m = BTreeMap::new();
    m.insert("ss_type".into(), json!(3));
    m.insert("trim".into(), json!(settings.trim));
    m.insert("permutations".into(), json!(settings.permutations));
    m.insert("resamples".into(), json!(settings.resamples));
    m.insert("hc".into(), json!(settings.hc.label()));
    m.insert("wj_reference".into(), json!(settings.wj_reference.id()));
    m.insert("ci_level".into(), json!(settings.ci_level));
    // Every setting, including ones added to `Settings` later, so that shards run with
    // different options can never be merged (seed, threads and bars do not shape results).
    let normalised = Settings { seed: 0, threads: None, quiet: true, ..dataset_settings(settings) };
    m.insert("all".into(), json!(format!("{normalised:?}")));
    m
}

fn build_plan(
    generator: Generator,
    layout: Layout,
    outcome: String,
    grid: Vec<Vec<usize>>,
    settings: &Settings,
) -> Plan {
    let engines = selected_engines(settings);
    let ids: Vec<&str> = engines.iter().map(|e| e.id()).collect();
    let all: Vec<usize> = (0..engines.len()).collect();
    let conditions = match &generator {
        Generator::Designed(s) => {
            let mut c = vec![(Condition::Null, all.clone())];
            if s.has_effects {
                c.push((Condition::Effects, all));
            }
            c
        }
        Generator::Like(_) => {
            let trimmed = ids.iter().position(|&id| id == "trimmed").filter(|_| settings.trim > 0.0);
            let rest: Vec<usize> = all.iter().copied().filter(|&e| Some(e) != trimmed).collect();
            let mut c = Vec::new();
            if !rest.is_empty() {
                c.push((Condition::EqualMeans, rest));
            }
            if let Some(t) = trimmed {
                c.push((Condition::EqualTrimmedMeans, vec![t]));
            }
            c
        }
    };
    let mut plan = Plan {
        generator,
        layout,
        outcome,
        grid,
        conditions,
        engines,
        settings: dataset_settings(settings),
        rows: Vec::new(),
    };
    plan.build_rows();
    plan
}

/// The plan description (everything shards must share).
fn spec(plan: &Plan, settings: &Settings, sims: u64, data_rows: Option<usize>) -> Result<PlanSpec> {
    let layout = &plan.layout;
    let engine_ids: Vec<String> = plan.engines.iter().map(|e| e.id().to_string()).collect();
    let mut noncentrality = Vec::new();
    let (mode, errors, effects, cells, data) = match &plan.generator {
        Generator::Designed(s) => {
            let cells = (0..layout.n_cells())
                .map(|c| CellSpec {
                    levels: layout.cell_labels(c),
                    mean: s.has_effects.then_some(s.means[c]),
                    null_mean: Some(s.null_means[c]),
                    sd: Some(s.sd[c]),
                    data: None,
                })
                .collect();
            let equal_sd = s.sd.iter().all(|&v| v == s.sd[0]);
            if s.has_effects && equal_sd && !s.errors.discretised() {
                for (g, n) in plan.grid.iter().enumerate() {
                    let forms = SsForms::new(layout, n, SsType::Three)?;
                    let sums: Vec<f64> = n.iter().zip(&s.means).map(|(&k, m)| k as f64 * m).collect();
                    for (t, term) in layout.terms.iter().enumerate() {
                        let ss = forms.ss(t, &sums) / (s.sd[0] * s.sd[0]);
                        if !scenario::component_is_zero(&layout.shape, &term.factors, &s.means) {
                            noncentrality.push(Noncentrality { grid: g, term: term.name.clone(), lambda: ss });
                        }
                    }
                }
            }
            let errors = Some(ErrorsSummary { id: s.errors.id(), description: s.errors.describe() });
            let effects = s.effects.iter().map(|(t, f)| TermEffect { term: t.clone(), f: *f }).collect();
            ("designed", errors, effects, cells, None)
        }
        Generator::Like(p) => {
            let cells = (0..layout.n_cells())
                .map(|c| CellSpec {
                    levels: layout.cell_labels(c),
                    mean: None,
                    null_mean: None,
                    sd: None,
                    data: Some(p.cells[c].clone()),
                })
                .collect();
            let data = Some(DataSummary {
                rows_used: data_rows.unwrap_or(0),
                fingerprint: p.fingerprint.clone(),
                trim: settings.trim,
            });
            ("like", None, Vec::new(), cells, data)
        }
    };
    Ok(PlanSpec {
        quorum_version: env!("CARGO_PKG_VERSION").to_string(),
        mode: mode.into(),
        seed: settings.seed,
        sims,
        alpha: settings.alpha,
        engines: engine_ids,
        engine_settings: engine_settings(settings),
        rejection_rule: format!(
            "a rejection is p < α = {} with each engine's own p; resampling engines use {} permutations and {} bootstrap resamples per dataset, without extension near α",
            settings.alpha, settings.permutations, settings.resamples
        ),
        streams: "simulation i: seed s_i = first output of stream (5, 0, i, 0) under --seed; cell c: stream (5, 0, 0, c + 1) under s_i; engines: their usual streams under s_i (METHODS §10.2, Overrides 11)".into(),
        outcome: plan.outcome.clone(),
        factors: layout.factors.iter().map(|f| FactorLevels { name: f.name.clone(), levels: f.levels.clone() }).collect(),
        errors,
        effects,
        cells,
        data,
        grid: plan
            .grid
            .iter()
            .map(|n| GridPoint { label: grid_label(n), n: n.clone(), total: n.iter().sum() })
            .collect(),
        conditions: plan
            .conditions
            .iter()
            .map(|(c, e)| ConditionSpec {
                id: c.id().into(),
                description: c.description().into(),
                engines: e.iter().map(|&i| plan.engines[i].id().to_string()).collect(),
            })
            .collect(),
        noncentrality,
    })
}

fn rows_from_counts(plan: &Plan, spec: &PlanSpec, counts: &simulate::Counts) -> Vec<RateRow> {
    plan.rows
        .iter()
        .enumerate()
        .map(|(i, k)| {
            let engine = plan.engines[k.engine].id();
            RateRow {
                condition: plan.conditions[k.condition].0.id().into(),
                grid: k.grid,
                n: spec.grid[k.grid].label.clone(),
                engine: engine.into(),
                term: plan.layout.terms[k.term].name.clone(),
                kind: k.kind,
                hypothesis: hypothesis(Family::of(engine)).into(),
                null_note: k.note.clone(),
                runs: counts.runs[i],
                rejections: counts.rejections[i],
                not_applicable: counts.not_applicable[i],
                not_applicable_example: counts.examples[i].clone(),
                rate: None,
                ci_low: None,
                ci_high: None,
                ci_level: result::RATE_CI_LEVEL,
                bradley: None,
            }
        })
        .collect()
}

fn thread_pool(threads: Option<usize>) -> Result<rayon::ThreadPool> {
    let mut builder = rayon::ThreadPoolBuilder::new();
    if let Some(t) = threads {
        builder = builder.num_threads(t);
    }
    builder.build().map_err(|e| {
        Error::usage(format!("cannot start {} worker threads: {e}", threads.unwrap_or(0)), "use fewer --threads")
    })
}

fn validate(config: &PlanConfig) -> Result<()> {
    if config.sims == 0 || config.sims > MAX_SIMS {
        return Err(Error::usage(
            format!("--sims {} is out of range", config.sims),
            "give 1 or more, e.g. --sims 1000",
        ));
    }
    if let Some(s) = config.shard {
        if s.count > config.sims {
            return Err(Error::usage(
                format!(
                    "--shard {}/{} splits {} simulations into more slices than simulations",
                    s.index, s.count, config.sims
                ),
                "use fewer slices or more --sims",
            ));
        }
    }
    if let Some(t) = config.max_time {
        if !(t.is_finite() && t > 0.0) {
            return Err(Error::usage(
                format!("--max-time {t} is not a positive number of seconds"),
                "e.g. --max-time 600",
            ));
        }
    }
    Ok(())
}

/// Runs `quorum plan`.
///
/// # Errors
/// Usage and input errors (exit 2), a `--like` dataset that cannot be analysed (exit 3),
/// a failed internal consistency check of an engine (exit 4).
pub fn run(config: &PlanConfig) -> Result<PlanReport> {
    validate(config)?;
    let settings = &config.settings;
    let (plan, input, rows_used) = match &config.source {
        PlanSource::Designed(d) => {
            let s = Scenario::resolve(d)?;
            let grid = resolve_grid(&config.sizes, s.layout.n_cells(), None)?;
            let layout = s.layout.clone();
            (build_plan(Generator::Designed(s), layout, "y".into(), grid, settings), None, None)
        }
        PlanSource::Like(data) => {
            let obs = crate::data::read(data)?;
            let design = Design::build(&obs, data)?;
            design.check_testable()?;
            let grid = resolve_grid(&config.sizes, design.n_cells(), Some(&design.cell_sizes()))?;
            let pools = like::LikePools::new(&design, settings.trim);
            let plan =
                build_plan(Generator::Like(pools), design.layout.clone(), design.outcome.clone(), grid, settings);
            (plan, Some(obs.source.clone()), Some(design.n_obs()))
        }
    };
    if plan.engines.is_empty() {
        return Err(Error::usage("no engine selected", format!("the engines are {}", engines::ids().join(", "))));
    }
    let spec = spec(&plan, settings, config.sims, rows_used)?;
    let (lo, hi) = config.shard.map(|s| s.range(config.sims)).unwrap_or((0, config.sims));
    let pool = thread_pool(settings.threads)?;
    let label = match config.shard {
        Some(s) => format!("plan, shard {}/{}", s.index, s.count),
        None => "plan".to_string(),
    };
    let bar = progress::progress(hi - lo, settings.quiet, &label);
    let ran = pool.install(|| plan.run_range(lo, hi, config.max_time, &bar))?;
    bar.finish();
    let rows = rows_from_counts(&plan, &spec, &ran.counts);
    let ranges = if ran.done > lo { vec![[lo, ran.done]] } else { Vec::new() };
    let coverage = Coverage { requested: config.sims, completed: ran.done - lo, ranges };
    let repro = PlanReproducibility {
        version: env!("CARGO_PKG_VERSION").to_string(),
        seed: settings.seed,
        threads: pool.current_num_threads(),
        command: config.command.clone(),
        input,
        shard: config.shard.map(|s| format!("{}/{}", s.index, s.count)),
        merged_from: Vec::new(),
        elapsed_seconds: results_finite(ran.elapsed),
        stopped_at_time_limit: ran.stopped,
    };
    Ok(result::finish(spec, coverage, rows, repro))
}

fn results_finite(x: f64) -> Option<f64> {
    crate::results::finite(x)
}

/// Runs `quorum merge`.
///
/// # Errors
/// A file that cannot be read (exit 2) or parts that do not belong together (exit 2).
pub fn merge_files(config: &MergeConfig) -> Result<PlanReport> {
    let mut parts = Vec::new();
    for path in &config.files {
        let text = std::fs::read_to_string(path).map_err(|source| Error::Io {
            path: path.display().to_string(),
            action: "reading",
            source,
        })?;
        parts.push((path.display().to_string(), text));
    }
    let first_seed = parts
        .first()
        .and_then(|(_, t)| serde_json::from_str::<serde_json::Value>(t).ok())
        .and_then(|v| v["spec"]["seed"].as_u64())
        .unwrap_or(0);
    let repro = PlanReproducibility {
        version: env!("CARGO_PKG_VERSION").to_string(),
        seed: first_seed,
        threads: rayon::current_num_threads(),
        command: config.command.clone(),
        input: None,
        shard: None,
        merged_from: parts.iter().map(|(n, _)| n.clone()).collect(),
        elapsed_seconds: None,
        stopped_at_time_limit: false,
    };
    result::merge(&parts, repro)
}

/// The short calibration that `analyze --calibrate` adds to the analysis.
#[derive(Debug, Clone, Serialize)]
pub struct Calibration {
    /// Simulations per condition.
    pub sims: u64,
    /// Seed.
    pub seed: u64,
    /// Permutations and resamples per simulated dataset (capped at [`CALIBRATION_RESAMPLES`]).
    pub resamples: u64,
    /// Significance level.
    pub alpha: f64,
    /// Bradley's band [α/2, 3α/2].
    pub band: [f64; 2],
    /// Per engine and term.
    pub rows: Vec<CalibrationRow>,
    /// Rates outside the band.
    pub flags: Vec<String>,
    /// Remarks.
    pub notes: Vec<String>,
}

/// One engine on one term in the calibration.
#[derive(Debug, Clone, Serialize)]
pub struct CalibrationRow {
    /// Engine id.
    pub engine: String,
    /// Term id.
    pub term: String,
    /// `equal-means` or `equal-trimmed-means`.
    pub condition: String,
    /// `type-i-error` or `rejection-rate` (rank engines: rejection rate with equal means).
    pub kind: RateKind,
    /// Rejection rate.
    pub rate: Option<f64>,
    /// 95% Clopper–Pearson interval, lower end.
    pub ci_low: Option<f64>,
    /// Upper end.
    pub ci_high: Option<f64>,
    /// Against Bradley's band.
    pub bradley: Option<result::Bradley>,
}

/// Default simulations of `analyze --calibrate`.
pub const CALIBRATION_SIMS: u64 = 500;

/// Resamples per simulated dataset in `analyze --calibrate` (at most): a resampling test's
/// level does not depend on B beyond the Monte Carlo error of each p.
pub const CALIBRATION_RESAMPLES: u64 = 999;

/// `--like` on an analysed design: each engine's rejection rate under its own null with the
/// data's shapes, `sims` datasets, resampling engines capped at [`CALIBRATION_RESAMPLES`].
///
/// # Errors
/// A failed internal consistency check of an engine (exit 4).
pub fn calibrate(design: &Design, settings: &Settings, sims: u64) -> Result<Calibration> {
    let mut s = settings.clone();
    s.permutations = s.permutations.min(CALIBRATION_RESAMPLES);
    s.resamples = s.resamples.min(CALIBRATION_RESAMPLES);
    let pools = like::LikePools::new(design, s.trim);
    let grid = vec![design.cell_sizes()];
    let plan = build_plan(Generator::Like(pools), design.layout.clone(), design.outcome.clone(), grid, &s);
    let spec = spec(&plan, &s, sims, Some(design.n_obs()))?;
    let bar = progress::progress(sims, s.quiet, "calibrating");
    let ran = plan.run_range(0, sims, None, &bar)?;
    bar.finish();
    let rows = rows_from_counts(&plan, &spec, &ran.counts);
    let repro = PlanReproducibility {
        version: env!("CARGO_PKG_VERSION").to_string(),
        seed: s.seed,
        threads: rayon::current_num_threads(),
        command: String::new(),
        input: None,
        shard: None,
        merged_from: Vec::new(),
        elapsed_seconds: None,
        stopped_at_time_limit: false,
    };
    let report =
        result::finish(spec, Coverage { requested: sims, completed: sims, ranges: vec![[0, sims]] }, rows, repro);
    let (lo, hi) = result::bradley_band(s.alpha);
    // Registry order of engines, whatever condition they ran under.
    let mut rates: Vec<&RateRow> = report.rates.iter().collect();
    rates.sort_by_key(|r| report.spec.engines.iter().position(|e| *e == r.engine));
    Ok(Calibration {
        sims,
        seed: s.seed,
        resamples: s.permutations.max(s.resamples),
        alpha: s.alpha,
        band: [lo, hi],
        rows: rates
            .iter()
            .map(|r| CalibrationRow {
                engine: r.engine.clone(),
                term: r.term.clone(),
                condition: r.condition.clone(),
                kind: r.kind,
                rate: r.rate,
                ci_low: r.ci_low,
                ci_high: r.ci_high,
                bradley: r.bradley,
            })
            .collect(),
        flags: report.flags.iter().map(|f| f.message.clone()).collect(),
        notes: report.notes.iter().skip(1).cloned().collect(),
    })
}

/// Prints a plan result on `out` in `format` and writes the report folder when asked:
/// `results.json`, `report.txt` and `plots/*.svg`. Returns the files written.
///
/// # Errors
/// I/O errors, or a report folder quorum may not write into (exit 2).
pub fn write_outputs(
    report: &PlanReport,
    output: &OutputSpec,
    input: Option<&Path>,
    out: &mut dyn Write,
) -> Result<Vec<PathBuf>> {
    let mut written = Vec::new();
    if let Some(dir) = &output.report_dir {
        use crate::report::folder;
        folder::prepare(dir)?;
        let json = to_json(report);
        let mut txt = Vec::new();
        let _ = text::render(report, &mut txt);
        for (name, body) in [("results.json", json.into_bytes()), ("report.txt", txt)] {
            let path = dir.join(name);
            folder::write_atomic(&path, &body, input)?;
            written.push(path);
        }
        let plots_dir = dir.join("plots");
        std::fs::create_dir_all(&plots_dir).map_err(|source| Error::Io {
            path: plots_dir.display().to_string(),
            action: "creating the folder",
            source,
        })?;
        for (name, svg) in plots::all(report) {
            let path = plots_dir.join(name);
            folder::write_atomic(&path, svg.as_bytes(), input)?;
            written.push(path);
        }
    }
    let printed = match output.format {
        Format::Json => out.write_all(to_json(report).as_bytes()),
        Format::Text => text::render(report, out),
        Format::Csv => out.write_all(to_csv(report).as_bytes()),
        // The plan's tables are aligned text; Markdown carries them as a fenced block.
        Format::Markdown => {
            out.write_all(b"```text\n").and_then(|_| text::render(report, out)).and_then(|_| out.write_all(b"```\n"))
        }
    };
    match printed.and_then(|_| out.flush()) {
        Err(e) if e.kind() == std::io::ErrorKind::BrokenPipe => {}
        Err(e) => return Err(Error::Io { path: "<stdout>".into(), action: "writing", source: e }),
        Ok(()) => {}
    }
    Ok(written)
}

/// The rejection rates as CSV, one row per condition, grid point, engine and term
/// (text cells guarded against spreadsheet formulas, as in `report::csv`).
pub fn to_csv(report: &PlanReport) -> String {
    use crate::report::csv::{number_cell, text_cell};
    let mut s = String::from("condition,n,engine,term,hypothesis,runs,rejections,not_applicable,rate,ci_low,ci_high\n");
    for r in &report.rates {
        let cells = [
            text_cell(&r.condition),
            text_cell(&r.n),
            text_cell(&r.engine),
            text_cell(&r.term),
            text_cell(&r.hypothesis),
            r.runs.to_string(),
            r.rejections.to_string(),
            r.not_applicable.to_string(),
            number_cell(r.rate),
            number_cell(r.ci_low),
            number_cell(r.ci_high),
        ];
        s.push_str(&cells.join(","));
        s.push('\n');
    }
    s
}

/// Pretty JSON with a trailing newline.
pub fn to_json(report: &PlanReport) -> String {
    let mut s = serde_json::to_string_pretty(report).unwrap_or_default();
    s.push('\n');
    s
}
