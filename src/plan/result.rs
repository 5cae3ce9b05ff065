//! The plan's results: the `quorum.plan/1` JSON object, built from integer counts so
//! that shards merge exactly.
//!
//! A run (whole or a shard) produces a [`PlanSpec`] (everything that defines the
//! simulation: a shard whose spec differs cannot be merged), the simulation indices it
//! covered, and per (condition, sample size, engine, term) the counts of datasets in
//! which the engine gave a p-value, rejected, or could not run. Everything else — rates,
//! Clopper–Pearson intervals, Bradley flags, notes — is derived from those counts by
//! [`finish`], so one run and the merge of its shards print the same object except for
//! the `reproducibility` block.

use super::scenario::RateKind;
use crate::dist;
use crate::error::{Error, Result};
use crate::results::finite;
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;

/// The schema id of plan results and shards.
pub const PLAN_SCHEMA: &str = "quorum.plan/1";

/// Level of the Monte Carlo interval of a rejection rate.
pub const RATE_CI_LEVEL: f64 = 0.95;

/// A factor and its levels.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FactorLevels {
    /// Name.
    pub name: String,
    /// Levels in order.
    pub levels: Vec<String>,
}

/// The error distribution of a designed scenario.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ErrorsSummary {
    /// `--errors` spelling.
    pub id: String,
    /// For people.
    pub description: String,
}

/// A standardized term effect (Cohen's f of the term, `plan::scenario`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct TermEffect {
    /// Term id.
    pub term: String,
    /// f.
    pub f: f64,
}

/// One cell of the scenario.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CellSpec {
    /// Level of each factor.
    pub levels: Vec<String>,
    /// Mean under the effects condition (SD units; latent for the composite); null in `--like`.
    pub mean: Option<f64>,
    /// Mean under the null condition; null in `--like`.
    pub null_mean: Option<f64>,
    /// Error SD (root mean square over cells 1); null in `--like`.
    pub sd: Option<f64>,
    /// The data's cell (`--like`).
    pub data: Option<super::like::DataCell>,
}

/// The data a `--like` plan resamples.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DataSummary {
    /// Rows used.
    pub rows_used: usize,
    /// FNV-1a of the cell sizes and outcome values.
    pub fingerprint: String,
    /// Trimming proportion behind `equal-trimmed-means`.
    pub trim: f64,
}

/// One sample-size setting.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct GridPoint {
    /// `20` when every cell has 20, else the list.
    pub label: String,
    /// n per cell, cell order.
    pub n: Vec<usize>,
    /// N.
    pub total: usize,
}

/// A data-generating condition and the engines run under it.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ConditionSpec {
    /// `null`, `effects`, `equal-means` or `equal-trimmed-means`.
    pub id: String,
    /// For people.
    pub description: String,
    /// Engines run on these datasets.
    pub engines: Vec<String>,
}

/// The noncentrality of the classical F of a term (continuous errors, equal SDs).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Noncentrality {
    /// Grid index.
    pub grid: usize,
    /// Term id.
    pub term: String,
    /// λ = (L_S μ)'(L_S D⁻¹ L_S')⁻¹(L_S μ)/σ²; under normal errors the classical F's power
    /// is P(F′(df_S, N − C, λ) > F_crit).
    pub lambda: f64,
}

/// Everything that defines the simulation (shards must agree on all of it).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PlanSpec {
    /// Version of quorum (results may change between versions).
    pub quorum_version: String,
    /// `designed` or `like`.
    pub mode: String,
    /// Seed of every stream.
    pub seed: u64,
    /// Simulations requested per condition and sample size.
    pub sims: u64,
    /// Significance level.
    pub alpha: f64,
    /// Engines, registry order.
    pub engines: Vec<String>,
    /// Engine settings that shape results.
    pub engine_settings: BTreeMap<String, serde_json::Value>,
    /// How a rejection is counted.
    pub rejection_rule: String,
    /// How random numbers are derived.
    pub streams: String,
    /// Outcome name.
    pub outcome: String,
    /// Factors and levels.
    pub factors: Vec<FactorLevels>,
    /// Error distribution (designed scenarios).
    pub errors: Option<ErrorsSummary>,
    /// Standardized effects as given.
    pub effects: Vec<TermEffect>,
    /// Cells.
    pub cells: Vec<CellSpec>,
    /// The data resampled (`--like`).
    pub data: Option<DataSummary>,
    /// Sample sizes.
    pub grid: Vec<GridPoint>,
    /// Conditions.
    pub conditions: Vec<ConditionSpec>,
    /// Classical F noncentrality per grid point and term with an effect.
    pub noncentrality: Vec<Noncentrality>,
}

/// Which simulation indices ran.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Coverage {
    /// Simulations requested.
    pub requested: u64,
    /// Simulations that ran.
    pub completed: u64,
    /// Half-open ranges [lo, hi) of simulation indices that ran, ascending, disjoint.
    pub ranges: Vec<[u64; 2]>,
}

/// The first dataset on which an engine could not run.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct NotApplicableExample {
    /// Simulation index.
    pub simulation: u64,
    /// The engine's reason.
    pub reason: String,
}

/// Where a type-I error lies against Bradley's (1978) liberal band [α/2, 3α/2].
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Bradley {
    /// Inside the band.
    Inside,
    /// Above: liberal.
    Above,
    /// Below: conservative.
    Below,
}

/// One engine on one term under one condition and sample size.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RateRow {
    /// Condition id.
    pub condition: String,
    /// Grid index.
    pub grid: usize,
    /// Sample size label.
    pub n: String,
    /// Engine id.
    pub engine: String,
    /// Term id.
    pub term: String,
    /// What the rate estimates.
    pub kind: RateKind,
    /// The engine's hypothesis in words.
    pub hypothesis: String,
    /// Why the null is not exact, when it is not.
    pub null_note: Option<String>,
    /// Datasets on which the engine gave a p-value.
    pub runs: u64,
    /// Of those, p < α.
    pub rejections: u64,
    /// Datasets on which it could not run on this term.
    pub not_applicable: u64,
    /// The first such dataset.
    pub not_applicable_example: Option<NotApplicableExample>,
    /// rejections / runs.
    pub rate: Option<f64>,
    /// Clopper–Pearson interval, lower end.
    pub ci_low: Option<f64>,
    /// Clopper–Pearson interval, upper end.
    pub ci_high: Option<f64>,
    /// Interval level (0.95).
    pub ci_level: f64,
    /// Against Bradley's band, for type-I errors and `--like` rejection rates.
    pub bradley: Option<Bradley>,
}

/// A rate outside Bradley's band.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PlanFlag {
    /// Engine id.
    pub engine: String,
    /// Term id.
    pub term: String,
    /// Condition id.
    pub condition: String,
    /// Sample size label.
    pub n: String,
    /// Plain words.
    pub message: String,
}

/// Time, threads and command: the only part that may differ between one run and merged shards.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PlanReproducibility {
    /// quorum version.
    pub version: String,
    /// Seed.
    pub seed: u64,
    /// Worker threads (never changes a result).
    pub threads: usize,
    /// The command as typed.
    pub command: String,
    /// The data file (`--like`).
    pub input: Option<String>,
    /// `K/N` for a shard.
    pub shard: Option<String>,
    /// Files merged.
    pub merged_from: Vec<String>,
    /// Wall time of the simulations, seconds.
    pub elapsed_seconds: Option<f64>,
    /// The run stopped at `--max-time` before finishing its simulations.
    pub stopped_at_time_limit: bool,
}

/// The whole plan result.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PlanReport {
    /// Always [`PLAN_SCHEMA`].
    pub schema: String,
    /// What was simulated.
    pub spec: PlanSpec,
    /// Which simulations ran.
    pub simulations: Coverage,
    /// Every rate.
    pub rates: Vec<RateRow>,
    /// Rates outside Bradley's band.
    pub flags: Vec<PlanFlag>,
    /// Remarks.
    pub notes: Vec<String>,
    /// Not part of the numbers.
    pub reproducibility: PlanReproducibility,
}

/// Clopper–Pearson (1934) interval of x successes in n trials at `level`:
/// [Beta_{a/2}(x, n − x + 1), Beta_{1−a/2}(x + 1, n − x)], 0 and 1 at the edges.
pub fn clopper_pearson(x: u64, n: u64, level: f64) -> (f64, f64) {
    let a = 1.0 - level;
    let (xf, nf) = (x as f64, n as f64);
    let lo = if x == 0 { 0.0 } else { dist::beta_quantile(a / 2.0, xf, nf - xf + 1.0) };
    let hi = if x >= n { 1.0 } else { dist::beta_quantile(1.0 - a / 2.0, xf + 1.0, nf - xf) };
    (lo, hi)
}

/// Bradley's (1978, British Journal of Mathematical and Statistical Psychology
/// 31:144–152) liberal criterion of robustness: α/2 ≤ rate ≤ 3α/2.
pub fn bradley_band(alpha: f64) -> (f64, f64) {
    // Rounded to 12 decimals so that 0.05 gives 0.075, not 0.07500000000000001.
    let round = |x: f64| (x * 1e12).round() / 1e12;
    (round(alpha / 2.0), round(1.5 * alpha))
}

/// Coalesces sorted ranges; errors on overlap.
///
/// # Errors
/// A usage error when two ranges overlap (the same simulations counted twice).
pub fn union_ranges(mut ranges: Vec<[u64; 2]>) -> Result<Vec<[u64; 2]>> {
    ranges.retain(|r| r[1] > r[0]);
    ranges.sort();
    let mut out: Vec<[u64; 2]> = Vec::new();
    for r in ranges {
        match out.last_mut() {
            Some(last) if r[0] < last[1] => {
                return Err(Error::usage(
                    format!("simulations {}–{} appear in more than one part", r[0].max(last[0]), r[1].min(last[1]) - 1),
                    "merge each shard once; shards of one plan must use the same --sims and different K in --shard K/N",
                ))
            }
            Some(last) if r[0] == last[1] => last[1] = r[1],
            _ => out.push(r),
        }
    }
    Ok(out)
}

fn ranges_text(ranges: &[[u64; 2]]) -> String {
    ranges.iter().map(|r| format!("{}–{}", r[0], r[1] - 1)).collect::<Vec<_>>().join(", ")
}

/// Derives rates, intervals, Bradley flags and notes from the counts in `rows`.
pub fn finish(spec: PlanSpec, simulations: Coverage, mut rows: Vec<RateRow>, repro: PlanReproducibility) -> PlanReport {
    let (lo, hi) = bradley_band(spec.alpha);
    let like = spec.mode == "like";
    let mut flags = Vec::new();
    for r in &mut rows {
        r.rate = None;
        r.ci_low = None;
        r.ci_high = None;
        r.bradley = None;
        r.ci_level = RATE_CI_LEVEL;
        if r.runs == 0 {
            continue;
        }
        let rate = r.rejections as f64 / r.runs as f64;
        let (cl, ch) = clopper_pearson(r.rejections, r.runs, RATE_CI_LEVEL);
        r.rate = finite(rate);
        r.ci_low = finite(cl);
        r.ci_high = finite(ch);
        let judged = r.kind == RateKind::TypeIError || (like && r.kind == RateKind::RejectionRate);
        if !judged {
            continue;
        }
        let b = if rate > hi {
            Bradley::Above
        } else if rate < lo {
            Bradley::Below
        } else {
            Bradley::Inside
        };
        r.bradley = Some(b);
        if b != Bradley::Inside {
            let what = if r.kind == RateKind::TypeIError { "type-I error" } else { "rejection rate with equal means" };
            let side = if b == Bradley::Above { "above" } else { "below" };
            let sure = if ch < lo || cl > hi {
                "its whole 95% interval lies outside"
            } else {
                "within Monte Carlo error of the band"
            };
            let n_part = if spec.grid.len() > 1 { format!(", n = {}", r.n) } else { String::new() };
            let mut message = format!(
                "{} on {} ({}{n_part}): {what} {:.3} [{:.3}, {:.3}] is {side} Bradley's band [{lo}, {hi}] ({sure})",
                r.engine, r.term, r.condition, rate, cl, ch
            );
            if r.kind == RateKind::RejectionRate {
                message.push_str("; this engine's null is not a statement about means, so this is not a type-I error");
            }
            flags.push(PlanFlag {
                engine: r.engine.clone(),
                term: r.term.clone(),
                condition: r.condition.clone(),
                n: r.n.clone(),
                message,
            });
        }
    }
    let notes = notes(&spec, &simulations, &rows);
    PlanReport { schema: PLAN_SCHEMA.to_string(), spec, simulations, rates: rows, flags, notes, reproducibility: repro }
}

fn notes(spec: &PlanSpec, cov: &Coverage, rows: &[RateRow]) -> Vec<String> {
    let mut notes = Vec::new();
    if cov.completed < cov.requested {
        notes.push(format!(
            "incomplete: {} of {} simulations ran (simulations {}); rates and their intervals use those that ran",
            cov.completed,
            cov.requested,
            if cov.ranges.is_empty() { "none".to_string() } else { ranges_text(&cov.ranges) }
        ));
    }
    notes.push(spec.rejection_rule.clone());
    // Engines that could not run: one note per condition, size and engine.
    let mut seen: Vec<(String, usize, String)> = Vec::new();
    for r in rows.iter().filter(|r| r.not_applicable > 0) {
        let key = (r.condition.clone(), r.grid, r.engine.clone());
        if seen.contains(&key) {
            continue;
        }
        seen.push(key);
        let worst = rows
            .iter()
            .filter(|o| o.condition == r.condition && o.grid == r.grid && o.engine == r.engine)
            .map(|o| o.not_applicable)
            .max()
            .unwrap_or(0);
        let total = r.runs + r.not_applicable;
        let example = r
            .not_applicable_example
            .as_ref()
            .map(|e| format!("; first at simulation {}: {}", e.simulation, e.reason))
            .unwrap_or_default();
        let n_part = if spec.grid.len() > 1 { format!(", n = {}", r.n) } else { String::new() };
        notes.push(format!(
            "{} could not run on up to {worst} of {total} datasets ({}{n_part}){example}; its rates use the datasets it ran on",
            r.engine, r.condition
        ));
    }
    if spec.mode == "like" {
        let others: Vec<&str> = rows
            .iter()
            .filter(|r| r.kind == RateKind::RejectionRate)
            .map(|r| r.engine.as_str())
            .fold(Vec::new(), |mut v, e| {
                if !v.contains(&e) {
                    v.push(e);
                }
                v
            });
        if !others.is_empty() {
            notes.push(format!(
                "{}: rejection rate with equal means — these engines test distribution functions or aligned ranks, and cells with equal means can still differ in shape and spread, so the rate is not a type-I error",
                others.join(", ")
            ));
        }
    }
    notes
}

/// A part file read for merging: only what merging needs.
#[derive(Debug, Deserialize)]
struct Part {
    schema: String,
    spec: serde_json::Value,
    simulations: Coverage,
    rates: Vec<RateRow>,
}

/// Merges plan results or shards of one plan (same spec) by adding their counts.
///
/// # Errors
/// A usage error for a file that is not a plan result, parts of different plans (the
/// message names the first differing setting), or overlapping simulations.
pub fn merge(parts: &[(String, String)], repro: PlanReproducibility) -> Result<PlanReport> {
    let mut read: Vec<(String, Part)> = Vec::new();
    for (name, text) in parts {
        let part: Part = serde_json::from_str(text).map_err(|e| {
            Error::usage(
                format!("{name} is not a quorum plan result: {e}"),
                "merge the JSON files written by `quorum plan --shard K/N` (or --format json)",
            )
        })?;
        if part.schema != PLAN_SCHEMA {
            return Err(Error::usage(
                format!("{name} has schema `{}`, not `{PLAN_SCHEMA}`", part.schema),
                "merge only plan results",
            ));
        }
        read.push((name.clone(), part));
    }
    let Some((first_name, first)) = read.first() else {
        return Err(Error::usage("no files to merge", "name the shard files, e.g. quorum merge parts/*.json"));
    };
    for (name, part) in &read[1..] {
        if part.spec != first.spec {
            let what = first_difference(&first.spec, &part.spec, "spec");
            return Err(Error::usage(
                format!("{name} and {first_name} come from different plans ({what} differs)"),
                "merge only shards of one plan: same design or data, settings, seed, --sims and quorum version",
            ));
        }
        let keys = |p: &Part| -> Vec<(String, usize, String, String, RateKind)> {
            p.rates.iter().map(|r| (r.condition.clone(), r.grid, r.engine.clone(), r.term.clone(), r.kind)).collect()
        };
        if keys(part) != keys(first) {
            return Err(Error::usage(
                format!("{name} and {first_name} list different rates"),
                "merge only unmodified shard files of one plan",
            ));
        }
    }
    let spec: PlanSpec = serde_json::from_value(first.spec.clone()).map_err(|e| {
        Error::usage(format!("{first_name}: the plan description cannot be read: {e}"), "merge unmodified shard files")
    })?;
    let ranges = union_ranges(read.iter().flat_map(|(_, p)| p.simulations.ranges.clone()).collect())?;
    let completed = ranges.iter().map(|r| r[1] - r[0]).sum();
    let mut rows = first.rates.clone();
    for row in &mut rows {
        row.runs = 0;
        row.rejections = 0;
        row.not_applicable = 0;
        row.not_applicable_example = None;
    }
    for (_, part) in &read {
        for (row, add) in rows.iter_mut().zip(&part.rates) {
            row.runs += add.runs;
            row.rejections += add.rejections;
            row.not_applicable += add.not_applicable;
            if let Some(ex) = &add.not_applicable_example {
                let earlier = row.not_applicable_example.as_ref().is_none_or(|cur| ex.simulation < cur.simulation);
                if earlier {
                    row.not_applicable_example = Some(ex.clone());
                }
            }
        }
    }
    let coverage = Coverage { requested: spec.sims, completed, ranges };
    Ok(finish(spec, coverage, rows, repro))
}

fn first_difference(a: &serde_json::Value, b: &serde_json::Value, path: &str) -> String {
    use serde_json::Value;
    match (a, b) {
        (Value::Object(x), Value::Object(y)) => {
            for (k, v) in x {
                match y.get(k) {
                    Some(w) if w == v => {}
                    Some(w) => return first_difference(v, w, &format!("{path}.{k}")),
                    None => return format!("{path}.{k}"),
                }
            }
            y.keys().find(|k| !x.contains_key(*k)).map(|k| format!("{path}.{k}")).unwrap_or_else(|| path.to_string())
        }
        (Value::Array(x), Value::Array(y)) if x.len() == y.len() => x
            .iter()
            .zip(y)
            .position(|(v, w)| v != w)
            .map(|i| first_difference(&x[i], &y[i], &format!("{path}[{i}]")))
            .unwrap_or_else(|| path.to_string()),
        _ => path.to_string(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn clopper_pearson_edges_are_closed_form() {
        // Closed forms at the edges (x = 0: upper end 1 − (a/2)^{1/n}); scipy values for
        // inner x are checked in tests/checks/plan.rs.
        let (lo, hi) = clopper_pearson(0, 100, 0.95);
        assert_eq!(lo, 0.0);
        // Upper end for x = 0: 1 − (α/2)^{1/n} exactly.
        assert!((hi - (1.0 - 0.025f64.powf(0.01))).abs() < 1e-9, "{hi}");
        let (lo, hi) = clopper_pearson(100, 100, 0.95);
        assert_eq!(hi, 1.0);
        assert!((lo - 0.025f64.powf(0.01)).abs() < 1e-9, "{lo}");
    }

    #[test]
    fn ranges_coalesce_and_refuse_overlap() {
        assert_eq!(union_ranges(vec![[250, 500], [0, 250], [600, 700]]).unwrap(), vec![[0, 500], [600, 700]]);
        assert!(union_ranges(vec![[0, 300], [250, 500]]).is_err());
        assert_eq!(bradley_band(0.05), (0.025, 0.075));
    }
}
