//! The simulation loop: datasets in parallel, every registry engine on each, integer
//! counts per (condition, sample size, engine, term).
//!
//! **Streams** (METHODS §10.2, Overrides 11). Simulation i first gets its own seed,
//! s_i = first output of the stream with key (5 = plan, 0, i, 0) under `--seed`. Cell c of
//! any dataset of simulation i draws from the stream with key (5, 0, 0, c + 1) under s_i,
//! observation by observation, so the first n values of a cell are the same for every
//! larger n (nested samples across `--n-grid`) and the null and effects conditions use
//! the same errors (common random numbers: power curves are smooth and the conditions
//! paired). The engines then run with `seed = s_i` and derive their usual
//! engine/term/chunk streams from it. Nothing depends on the thread count, the block
//! size or the shard: simulation i gives the same counts wherever it runs.
//!
//! **Decisions.** A rejection is p < α with the engine's own p (what `analyze` decides
//! on, without the Monte Carlo `undetermined` band). Resampling engines run with their
//! `--permutations`/`--resamples` and no extension near α (`max_permutations` is set to
//! the permutation count): extension would make the cost unpredictable and changes a
//! rejection rate only through Monte Carlo error of the individual p-values.

use super::like::LikePools;
use super::progress::Progress;
use super::result::NotApplicableExample;
use super::scenario::{Family, RateKind, Scenario};
use crate::config::{Settings, SsType};
use crate::design::forms::SsForms;
use crate::design::{Design, Layout};
use crate::engines::{Context, Engine};
use crate::error::Result;
use crate::model::Fit;
use crate::resample::{Purpose, Stream, StreamKey};
use rayon::prelude::*;
use std::time::Instant;

/// Simulations per checkpoint: `--max-time` stops only between blocks and progress is
/// reduced block by block. Results never depend on it.
pub const PLAN_BLOCK: u64 = 32;

/// The seed of simulation `sim`: first output of the stream (5, 0, sim, 0) under `seed`.
pub fn dataset_seed(seed: u64, sim: u64) -> u64 {
    Stream::new(seed, StreamKey { purpose: Purpose::Plan, term: 0, chunk: sim, aux: 0 }).next_u64()
}

/// The stream of cell `c` of simulation seed `ds`: key (5, 0, 0, c + 1).
pub fn cell_stream(ds: u64, c: usize) -> Stream {
    Stream::new(ds, StreamKey { purpose: Purpose::Plan, term: 0, chunk: 0, aux: c as u64 + 1 })
}

/// A data-generating condition.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Condition {
    /// Designed: every cell at the same mean.
    Null,
    /// Designed: the scenario's cell means.
    Effects,
    /// `--like`: residuals about the cell means.
    EqualMeans,
    /// `--like`: residuals about the cells' trimmed means.
    EqualTrimmedMeans,
}

impl Condition {
    /// Id in the results.
    pub fn id(self) -> &'static str {
        match self {
            Condition::Null => "null",
            Condition::Effects => "effects",
            Condition::EqualMeans => "equal-means",
            Condition::EqualTrimmedMeans => "equal-trimmed-means",
        }
    }

    /// For people.
    pub fn description(self) -> &'static str {
        match self {
            Condition::Null => "every cell at the same mean (no effects), same errors and SDs",
            Condition::Effects => "the scenario's cell means",
            Condition::EqualMeans => {
                "each cell resamples its own residuals about its mean, inflated by √(n/(n − 1)): equal means, the data's shapes and spreads"
            }
            Condition::EqualTrimmedMeans => {
                "each cell resamples its own residuals about its (population) trimmed mean, inflated by √(n/(n − 1)): equal trimmed means"
            }
        }
    }
}

/// Where datasets come from.
pub enum Generator {
    /// A designed scenario.
    Designed(Scenario),
    /// Resampling the user's data.
    Like(LikePools),
}

/// One rate's identity and what it estimates.
#[derive(Debug, Clone)]
pub struct RowKey {
    /// Condition index.
    pub condition: usize,
    /// Grid index.
    pub grid: usize,
    /// Engine index.
    pub engine: usize,
    /// Term index.
    pub term: usize,
    /// What the rate estimates.
    pub kind: RateKind,
    /// Why the null is not exact.
    pub note: Option<String>,
}

/// Everything a simulation needs, fixed before the first dataset.
pub struct Plan {
    /// The generator.
    pub generator: Generator,
    /// Factors and terms.
    pub layout: Layout,
    /// Outcome name.
    pub outcome: String,
    /// Cell sizes of each grid point.
    pub grid: Vec<Vec<usize>>,
    /// Conditions with the indices of the engines run under each.
    pub conditions: Vec<(Condition, Vec<usize>)>,
    /// Engines chosen, registry order.
    pub engines: Vec<Box<dyn Engine>>,
    /// Settings every dataset starts from (the seed is replaced per dataset).
    pub settings: Settings,
    /// Rates in output order: condition, grid point, engine, term.
    pub rows: Vec<RowKey>,
}

/// Integer counts per row.
#[derive(Debug, Clone)]
pub struct Counts {
    /// Datasets with a p-value.
    pub runs: Vec<u64>,
    /// Of those, p < α.
    pub rejections: Vec<u64>,
    /// Datasets without a p-value.
    pub not_applicable: Vec<u64>,
    /// First dataset without one.
    pub examples: Vec<Option<NotApplicableExample>>,
}

impl Counts {
    fn new(rows: usize) -> Counts {
        Counts {
            runs: vec![0; rows],
            rejections: vec![0; rows],
            not_applicable: vec![0; rows],
            examples: vec![None; rows],
        }
    }
}

/// What happened on one row in one simulation.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Outcome {
    Retain,
    Reject,
    NotApplicable,
}

struct SimOutcome {
    outcomes: Vec<Outcome>,
    reasons: Vec<(usize, String)>,
}

/// What a run of a range of simulations gives.
pub struct RangeResult {
    /// Counts of the simulations that ran.
    pub counts: Counts,
    /// Simulations lo..done ran.
    pub done: u64,
    /// Stopped at the time limit.
    pub stopped: bool,
    /// Wall time, seconds.
    pub elapsed: f64,
}

impl Plan {
    /// Builds the rate rows, classifying each (designed: `Scenario::classify`; `--like`:
    /// means engines' and the trimmed engine's nulls are exact, the others report a
    /// rejection rate with equal means).
    pub fn build_rows(&mut self) {
        let mut rows = Vec::new();
        for (ci, (cond, engines)) in self.conditions.iter().enumerate() {
            for g in 0..self.grid.len() {
                for &e in engines {
                    let family = Family::of(self.engines[e].id());
                    for t in 0..self.layout.terms.len() {
                        let (kind, note) = match (&self.generator, cond) {
                            (Generator::Designed(s), c) => {
                                s.classify(s.condition_means(*c == Condition::Effects), family, t)
                            }
                            (Generator::Like(_), Condition::EqualTrimmedMeans) => (RateKind::TypeIError, None),
                            (Generator::Like(_), _) => match family {
                                Family::Means => (RateKind::TypeIError, None),
                                _ => (
                                    RateKind::RejectionRate,
                                    Some(
                                        "rejection rate with equal means: this engine's null is not about means".into(),
                                    ),
                                ),
                            },
                        };
                        rows.push(RowKey { condition: ci, grid: g, engine: e, term: t, kind, note });
                    }
                }
            }
        }
        self.rows = rows;
    }

    /// Fills `cells` with one dataset of condition `cond` at sizes `n` for simulation seed `ds`.
    fn fill(&self, cond: Condition, n: &[usize], ds: u64, cells: &mut [Vec<f64>]) {
        for (c, cell) in cells.iter_mut().enumerate() {
            cell.clear();
            match &self.generator {
                Generator::Designed(s) => {
                    let mu = s.condition_means(cond == Condition::Effects)[c];
                    let mut sampler = s.errors.sampler(cell_stream(ds, c));
                    cell.extend((0..n[c]).map(|_| sampler.value(mu, s.sd[c])));
                }
                Generator::Like(p) => {
                    let pool =
                        if cond == Condition::EqualTrimmedMeans { &p.about_trimmed[c] } else { &p.about_means[c] };
                    let mut stream = cell_stream(ds, c);
                    let m = pool.len() as u64;
                    cell.extend((0..n[c]).map(|_| pool[stream.bounded(m) as usize]));
                }
            }
        }
    }

    /// Runs simulation `sim`: every condition, grid point and engine.
    fn simulate_one(&self, sim: u64) -> Result<SimOutcome> {
        let ds = dataset_seed(self.settings.seed, sim);
        let settings = Settings { seed: ds, ..self.settings.clone() };
        let mut cells = vec![Vec::new(); self.layout.n_cells()];
        let mut outcomes = Vec::with_capacity(self.rows.len());
        let mut reasons = Vec::new();
        let alpha = settings.alpha;
        for (cond, engines) in &self.conditions {
            for n in &self.grid {
                self.fill(*cond, n, ds, &mut cells);
                let design = Design::from_cells(&self.outcome, self.layout.factors.clone(), &cells)?;
                let fit = Fit::new(&design);
                let forms = SsForms::new(&design.layout, &fit.n, SsType::Three)?;
                let ctx = Context { design: &design, fit: &fit, forms: &forms, settings: &settings };
                for &e in engines {
                    let result = self.engines[e].run(&ctx)?;
                    for t in 0..self.layout.terms.len() {
                        let tr = result.terms.iter().find(|r| r.term == self.layout.terms[t].name);
                        match tr.and_then(|r| r.p) {
                            Some(p) if p < alpha => outcomes.push(Outcome::Reject),
                            Some(_) => outcomes.push(Outcome::Retain),
                            None => {
                                let why = tr
                                    .and_then(|r| r.not_applicable.clone())
                                    .unwrap_or_else(|| "the engine gave no p-value".to_string());
                                reasons.push((outcomes.len(), why));
                                outcomes.push(Outcome::NotApplicable);
                            }
                        }
                    }
                }
            }
        }
        Ok(SimOutcome { outcomes, reasons })
    }

    /// Runs simulations `lo..hi` in blocks of [`PLAN_BLOCK`], in parallel within a block,
    /// stopping before a block that the time so far says would end past `max_time`
    /// seconds (the first block always runs).
    ///
    /// # Errors
    /// A failed internal consistency check of an engine (exit 4).
    pub fn run_range(&self, lo: u64, hi: u64, max_time: Option<f64>, progress: &Progress) -> Result<RangeResult> {
        let start = Instant::now();
        let mut counts = Counts::new(self.rows.len());
        let mut next = lo;
        let mut blocks = 0u32;
        let mut stopped = false;
        while next < hi {
            if let (Some(limit), true) = (max_time, blocks > 0) {
                let elapsed = start.elapsed().as_secs_f64();
                if elapsed + elapsed / blocks as f64 > limit {
                    stopped = true;
                    break;
                }
            }
            let end = (next + PLAN_BLOCK).min(hi);
            let results: Vec<Result<SimOutcome>> = (next..end)
                .into_par_iter()
                .map(|i| {
                    let r = self.simulate_one(i);
                    progress.inc(1);
                    r
                })
                .collect();
            for (i, r) in (next..end).zip(results) {
                let r = r?;
                for (row, o) in r.outcomes.iter().enumerate() {
                    match o {
                        Outcome::Reject => {
                            counts.runs[row] += 1;
                            counts.rejections[row] += 1;
                        }
                        Outcome::Retain => counts.runs[row] += 1,
                        Outcome::NotApplicable => counts.not_applicable[row] += 1,
                    }
                }
                for (row, reason) in r.reasons {
                    if counts.examples[row].is_none() {
                        counts.examples[row] = Some(NotApplicableExample { simulation: i, reason });
                    }
                }
            }
            next = end;
            blocks += 1;
        }
        Ok(RangeResult { counts, done: next, stopped, elapsed: start.elapsed().as_secs_f64() })
    }
}
