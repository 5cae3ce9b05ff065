//! The `bootstrap` engine: a wild-bootstrap test of every term, and stratified
//! bootstrap intervals of the estimates reviewers ask about (METHODS §8, Overrides 10).
//!
//! **Test** (METHODS §8.6; Wu 1986, Liu 1988, Mammen 1993, Davidson & Flachaire 2008).
//! The statistic is the HC3 Wald F of the term's Type III hypothesis L_S μ = 0, exactly
//! as the `hc` engine computes it ([`hc::hc_wald`]). Its null distribution comes from
//! the wild bootstrap: the restricted fit drops the term's columns from the sum-coded
//! model, which at cell level is the D-metric projection of the cell means onto
//! {L_S μ = 0} (μ̃ = μ̂ − D⁻¹L'(LD⁻¹L')⁻¹Lμ̂, constant within cells); each resample
//! multiplies the restricted residuals ẽ_i = y_i − μ̃_c by weights v_i (Rademacher by
//! default, Mammen selectable) and recomputes F* from cell sums and cell sums of
//! squares in closed form: with e_i = y_i − ȳ_c and δ_c = ȳ_c − μ̃_c, the cell sum of
//! ẽv is Σe v + δ_c Σv and its sum of squares Σe²v² + 2δ_c Σe v² + δ_c² Σv², so one
//! pass over the N weights serves every term and the loop allocates nothing. Every
//! term sees the same weights (stream term code 0). p = (1 + #{F* ≥ F(1 − 1e-10)})/(B + 1)
//! through [`McCount`], extended up to `--max-permutations` while α lies inside the 99%
//! Clopper–Pearson interval, else `undetermined` (DESIGN.md "Monte Carlo honesty"). This
//! p is the engine's decision.
//!
//! **Intervals** ([`intervals`]): descriptive, never a decision rule.
//!
//! The engine needs n_c ≥ 2 and a non-constant outcome in every cell for its test (the
//! HC3 covariance is undefined otherwise); it then marks every term not applicable,
//! naming the cells, and still reports the intervals.

pub mod intervals;

use super::{hc, Context, Engine};
use crate::config::{HcType, Settings, WildWeights};
use crate::design::forms::DENSE_CELL_LIMIT;
use crate::design::Design;
use crate::error::{Error, Result};
use crate::model::wald::{WaldForm, WaldScratch};
use crate::model::Fit;
use crate::resample::progress::{Progress, Visibility};
use crate::resample::{self, mc, mc::McCount, Purpose};
use crate::results::{
    finite, BootstrapDetails, BootstrapInterval, Details, Effect, EngineResult, IntervalFamily, TermResult, WildTermRow,
};
use nalgebra::{DMatrix, DVector};
use serde_json::json;
use std::collections::BTreeMap;
use std::ops::Range;

/// The bootstrap engine (id `bootstrap`).
pub struct Bootstrap;

/// Designs with more cells than this get no intervals (the jackknife set-up costs
/// O(C·q²) per term); the test runs up to [`DENSE_CELL_LIMIT`] cells.
pub const INTERVAL_CELL_LIMIT: usize = 512;

/// A term whose wild bootstrap would cost more than this many floating-point operations
/// (B·(q³/3 + q²·C): a dense q×q covariance formed and factorised per resample) is not
/// tested; about a minute on one core. Only very large interactions reach it (e.g. a
/// 20×30 interaction, q = 551, at B = 1999).
pub const WILD_WORK_LIMIT: f64 = 5e10;

/// At most this many degenerate cells are named in a reason; the rest are counted.
const NAMED_CELLS: usize = 5;

/// How the Monte Carlo error of interval ends is computed (reported in the details).
pub const MC_ERROR_METHOD: &str = "first-order expansion of the empirical cdf of the resampled values: SE = slope·√(B·V) with V = p(1 − p) for a percentile end and, for a BCa end, V also carrying the resampling noise of z0; slope from the order statistics ±√(Bp(1 − p)) ranks around the end";

/// Mammen's (1993) two-point weights: (low value, high value, probability of the low value):
/// v = −(√5 − 1)/2 with probability (√5 + 1)/(2√5), else (√5 + 1)/2.
pub fn mammen_weights() -> (f64, f64, f64) {
    let s5 = 5f64.sqrt();
    (-(s5 - 1.0) / 2.0, (s5 + 1.0) / 2.0, (s5 + 1.0) / (2.0 * s5))
}

/// The scheme name of the test in the `mc` block.
pub fn scheme(weights: WildWeights) -> String {
    format!("wild-bootstrap-{}", weights.id())
}

/// Type III quantities of one term that a change of one cell updates in O(1):
/// with b = Lμ and M = L D⁻¹ L', SS = b'M⁻¹b, r_c = ℓ_c'M⁻¹b and h_c = ℓ_c'M⁻¹ℓ_c
/// (ℓ_c the column of L for cell c).
#[derive(Debug, Clone)]
pub struct TermProjection {
    /// SS_S = (Lμ)'(LD⁻¹L')⁻¹(Lμ) (METHODS §1.2, Type III).
    pub ss: f64,
    /// r_c = ℓ_c'M⁻¹Lμ.
    pub r: Vec<f64>,
    /// h_c = ℓ_c'M⁻¹ℓ_c.
    pub h: Vec<f64>,
}

impl TermProjection {
    /// The projection quantities of `form` (L_S) for cell sizes `n` and cell means `mu`.
    /// `None` when L D⁻¹ L' is not positive definite.
    pub fn new(form: &WaldForm, n: &[usize], mu: &[f64]) -> Option<TermProjection> {
        let (q, c) = (form.q(), n.len());
        let l = DMatrix::from_fn(q, c, |r, j| form.row(r)[j]);
        let mut ld = l.clone();
        for (j, &nj) in n.iter().enumerate() {
            ld.column_mut(j).scale_mut(1.0 / nj as f64);
        }
        let m = &ld * l.transpose();
        let chol = m.cholesky()?;
        let b = &l * DVector::from_column_slice(mu);
        let w = chol.solve(&b);
        let r: Vec<f64> = (l.transpose() * &w).iter().copied().collect();
        let z = chol.l().solve_lower_triangular(&l)?;
        let h: Vec<f64> = (0..c).map(|j| z.column(j).norm_squared()).collect();
        let ss = b.dot(&w);
        (ss.is_finite() && h.iter().all(|x| x.is_finite())).then_some(TermProjection { ss, r, h })
    }

    /// δ_c = r_c/n_c: the restricted fit of the term's Type III hypothesis is μ̃ = μ − δ,
    /// the D-metric projection of μ onto {Lμ = 0} (the sum-coded model without the
    /// term's columns; METHODS §8.6 step 2). Σ_c n_c δ_c² = SS.
    pub fn restricted_shift(&self, n: &[usize]) -> Vec<f64> {
        self.r.iter().zip(n).map(|(r, &nc)| r / nc as f64).collect()
    }

    /// The term's SS after deleting one observation of cell c (size `n_c` → n_c − 1)
    /// that moves the cell mean by `delta`: with β = 1/(n_c(n_c − 1)),
    /// SS' = SS + 2Δr_c + Δ²h_c − β(r_c + Δh_c)²/(1 + βh_c) (Sherman–Morrison).
    /// NaN when the cell would be empty.
    pub fn ss_after_deletion(&self, c: usize, n_c: usize, delta: f64) -> f64 {
        if n_c < 2 {
            return f64::NAN;
        }
        let nf = n_c as f64;
        let beta = 1.0 / (nf * (nf - 1.0));
        let (r, h) = (self.r[c], self.h[c]);
        let u = r + delta * h;
        (self.ss + 2.0 * delta * r + delta * delta * h - beta * u * u / (1.0 + beta * h)).max(0.0)
    }
}

/// Monte Carlo count of one term's wild-bootstrap test.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct WildCount {
    /// Resamples and exceedances.
    pub count: McCount,
    /// Resamples whose F* was undefined (counted among the exceedances).
    pub undefined: u64,
}

/// The observed HC3 Wald F of every term ([`hc::hc_wald`]); `None` where undefined.
pub fn observed_f(fit: &Fit, forms: &[WaldForm]) -> Vec<Option<f64>> {
    let v = hc::cell_variances(&fit.n, &fit.ss_within, HcType::Hc3);
    forms.iter().map(|f| hc::hc_wald(f, &fit.mean, &v, fit.df_error).map(|w| w.f)).collect()
}

/// What a wild-bootstrap pass reads.
struct WildData<'a> {
    ranges: Vec<Range<usize>>,
    /// Within-cell residuals e_i = y_i − ȳ_c, canonical order.
    e: Vec<f64>,
    n: Vec<f64>,
    sum_e: Vec<f64>,
    sum_e2: Vec<f64>,
    /// Restricted cell means μ̃ of each term.
    restricted: Vec<Vec<f64>>,
    /// δ = ȳ − μ̃ of each term.
    shift: Vec<Vec<f64>>,
    forms: &'a [WaldForm],
    observed: &'a [Option<f64>],
    weights: WildWeights,
    seed: u64,
}

/// The wild-bootstrap test of every term (METHODS §8.6; module doc). `observed[t]` is
/// the observed HC3 F of term t ([`observed_f`]); terms where it is `None` get `None`.
/// Terms share the weights of resamples 0..B; a term whose α lies inside the 99%
/// Clopper–Pearson interval of its p gets more resamples ([`mc::next_resamples`]) up to
/// `settings.max_permutations`.
///
/// # Errors
/// An internal error when a term's restricted fit cannot be computed (L D⁻¹ L' not
/// positive definite, impossible for a complete factorial).
pub fn wild_test(
    design: &Design,
    fit: &Fit,
    forms: &[WaldForm],
    observed: &[Option<f64>],
    settings: &Settings,
) -> Result<Vec<Option<WildCount>>> {
    let data = wild_data(design, fit, forms, observed, settings)?;
    let active: Vec<usize> = (0..forms.len()).filter(|&t| observed[t].is_some()).collect();
    let b0 = settings.resamples;
    let progress = Progress::counting("bootstrap test", "resamples", b0, Visibility::from_quiet(settings.quiet));
    let (exc, und) = count_range(&data, &active, 0, b0, &progress);
    let mut counts: Vec<Option<WildCount>> = vec![None; forms.len()];
    for (k, &t) in active.iter().enumerate() {
        counts[t] = Some(WildCount { count: McCount { resamples: b0, exceedances: exc[k] }, undefined: und[k] });
    }
    let max = settings.max_permutations.max(b0);
    let mut current = b0;
    loop {
        let ambiguous: Vec<usize> = active
            .iter()
            .copied()
            .filter(|&t| counts[t].is_some_and(|w| w.count.resamples == current && w.count.ambiguous(settings.alpha)))
            .collect();
        if ambiguous.is_empty() {
            break;
        }
        let Some(next) = mc::next_resamples(current, max) else {
            break;
        };
        progress.extend(next - current);
        let (exc, und) = count_range(&data, &ambiguous, current, next, &progress);
        for (k, &t) in ambiguous.iter().enumerate() {
            if let Some(w) = counts[t].as_mut() {
                w.count.resamples = next;
                w.count.exceedances += exc[k];
                w.undefined += und[k];
            }
        }
        current = next;
    }
    Ok(counts)
}

/// The restricted cell means μ̃ of term `form` (centred outcome scale; add the design's
/// location for outcome units): the fit of the sum-coded model without the term's
/// columns (METHODS §8.6 step 2). `None` when L D⁻¹ L' is singular.
pub fn restricted_means(fit: &Fit, form: &WaldForm) -> Option<Vec<f64>> {
    let proj = TermProjection::new(form, &fit.n, &fit.mean)?;
    Some(fit.mean.iter().zip(proj.restricted_shift(&fit.n)).map(|(m, d)| m - d).collect())
}

/// F*_S of every term for wild resamples `start..end`, in resample order (`None` where
/// F* is undefined): the values the engine counts, for checks against an outside
/// implementation.
///
/// # Errors
/// As [`wild_test`].
pub fn wild_replicates(
    design: &Design,
    fit: &Fit,
    forms: &[WaldForm],
    settings: &Settings,
    start: u64,
    end: u64,
) -> Result<Vec<Vec<Option<f64>>>> {
    let observed = vec![None; forms.len()];
    let data = wild_data(design, fit, forms, &observed, settings)?;
    let mammen = mammen_weights();
    let chunks = resample::par_chunks(start, end, |task| {
        let n_cells = data.ranges.len();
        let mut stream = task.stream(data.seed, Purpose::WildWeights, 0, 0);
        let mut sums = WeightSums::new(n_cells);
        let (mut mean, mut var) = (vec![0.0; n_cells], vec![0.0; n_cells]);
        let mut scratch: Vec<WaldScratch> = forms.iter().map(WaldForm::scratch).collect();
        let mut out: Vec<Vec<Option<f64>>> = vec![Vec::new(); forms.len()];
        for b in task.first..task.hi {
            weight_sums(&data, &mut stream, mammen, &mut sums);
            if b >= task.lo {
                for (t, o) in out.iter_mut().enumerate() {
                    o.push(f_star(&data, t, &sums, &mut mean, &mut var, &mut scratch[t]));
                }
            }
        }
        out
    });
    let mut all: Vec<Vec<Option<f64>>> = vec![Vec::new(); forms.len()];
    for chunk in chunks {
        for (a, c) in all.iter_mut().zip(chunk) {
            a.extend(c);
        }
    }
    Ok(all)
}

/// Residuals, restricted fits and settings of a wild-bootstrap pass.
fn wild_data<'a>(
    design: &Design,
    fit: &Fit,
    forms: &'a [WaldForm],
    observed: &'a [Option<f64>],
    settings: &Settings,
) -> Result<WildData<'a>> {
    let ranges: Vec<Range<usize>> = (0..design.n_cells()).map(|c| design.cell_range(c)).collect();
    let y = design.y();
    let mut e = vec![0.0; y.len()];
    let mut sum_e = Vec::with_capacity(ranges.len());
    let mut sum_e2 = Vec::with_capacity(ranges.len());
    for (c, r) in ranges.iter().enumerate() {
        let (mut s, mut q) = (0.0, 0.0);
        for i in r.clone() {
            e[i] = y[i] - fit.mean[c];
            s += e[i];
            q += e[i] * e[i];
        }
        sum_e.push(s);
        sum_e2.push(q);
    }
    let mut restricted = Vec::with_capacity(forms.len());
    let mut shift = Vec::with_capacity(forms.len());
    for (t, form) in forms.iter().enumerate() {
        let proj = TermProjection::new(form, &fit.n, &fit.mean).ok_or_else(|| {
            Error::internal(format!(
                "bootstrap engine: the restricted fit of term {} is singular",
                design.terms()[t].name
            ))
        })?;
        let delta = proj.restricted_shift(&fit.n);
        restricted.push(fit.mean.iter().zip(&delta).map(|(m, d)| m - d).collect());
        shift.push(delta);
    }
    Ok(WildData {
        ranges,
        e,
        n: fit.n.iter().map(|&n| n as f64).collect(),
        sum_e,
        sum_e2,
        restricted,
        shift,
        forms,
        observed,
        weights: settings.wild_weights,
        seed: settings.seed,
    })
}

/// Per-cell weighted sums of one resample: Σe v, Σv, Σe²v², Σe v², Σv².
struct WeightSums {
    ev: Vec<f64>,
    v: Vec<f64>,
    e2v2: Vec<f64>,
    ev2: Vec<f64>,
    v2: Vec<f64>,
}

impl WeightSums {
    fn new(n_cells: usize) -> WeightSums {
        let z = vec![0.0; n_cells];
        WeightSums { ev: z.clone(), v: z.clone(), e2v2: z.clone(), ev2: z.clone(), v2: z }
    }
}

/// Draws the weights of one resample (METHODS §10.3: Rademacher bit i mod 64 of word
/// ⌊i/64⌋, canonical index i; Mammen from one uniform per observation) and accumulates
/// the per-cell sums. Allocates nothing.
fn weight_sums(data: &WildData<'_>, stream: &mut resample::Stream, mammen: (f64, f64, f64), s: &mut WeightSums) {
    match data.weights {
        WildWeights::Rademacher => {
            let mut word = 0u64;
            for (c, r) in data.ranges.iter().enumerate() {
                let (mut ev, mut sv) = (0.0, 0.0);
                for i in r.clone() {
                    if i & 63 == 0 {
                        word = stream.next_u64();
                    }
                    let v = if (word >> (i & 63)) & 1 == 1 { 1.0 } else { -1.0 };
                    ev += data.e[i] * v;
                    sv += v;
                }
                s.ev[c] = ev;
                s.v[c] = sv;
            }
        }
        WildWeights::Mammen => {
            let (low, high, p_low) = mammen;
            for (c, r) in data.ranges.iter().enumerate() {
                let (mut ev, mut sv, mut e2v2, mut ev2, mut v2) = (0.0, 0.0, 0.0, 0.0, 0.0);
                for i in r.clone() {
                    let v = if stream.uniform() < p_low { low } else { high };
                    let e = data.e[i];
                    ev += e * v;
                    sv += v;
                    e2v2 += e * e * v * v;
                    ev2 += e * v * v;
                    v2 += v * v;
                }
                s.ev[c] = ev;
                s.v[c] = sv;
                s.e2v2[c] = e2v2;
                s.ev2[c] = ev2;
                s.v2[c] = v2;
            }
        }
    }
}

/// F* of term t from one resample's weight sums: cell means μ̃_c + A_c/n_c and HC3
/// variances (B_c − A_c²/n_c)/(n_c − 1)² with A_c = Σẽv, B_c = Σẽ²v² (module doc).
/// `None` when the covariance is singular.
fn f_star(
    data: &WildData<'_>,
    t: usize,
    s: &WeightSums,
    mean: &mut [f64],
    var: &mut [f64],
    scratch: &mut WaldScratch,
) -> Option<f64> {
    let (mu, delta) = (&data.restricted[t], &data.shift[t]);
    for c in 0..data.ranges.len() {
        let (n, d) = (data.n[c], delta[c]);
        let a = s.ev[c] + d * s.v[c];
        let b = match data.weights {
            WildWeights::Rademacher => data.sum_e2[c] + 2.0 * d * data.sum_e[c] + d * d * n,
            WildWeights::Mammen => s.e2v2[c] + 2.0 * d * s.ev2[c] + d * d * s.v2[c],
        };
        mean[c] = mu[c] + a / n;
        var[c] = (b - a * a / n).max(0.0) / ((n - 1.0) * (n - 1.0));
    }
    let form = &data.forms[t];
    let w = form.statistic(mean, var, scratch)?;
    let f = w / form.q() as f64;
    f.is_finite().then_some(f)
}

/// Exceedances and undefined resamples of `terms` over resamples `start..end`.
fn count_range(
    data: &WildData<'_>,
    terms: &[usize],
    start: u64,
    end: u64,
    progress: &Progress,
) -> (Vec<u64>, Vec<u64>) {
    let mammen = mammen_weights();
    let per_chunk = resample::par_chunks(start, end, |task| {
        let n_cells = data.ranges.len();
        let mut stream = task.stream(data.seed, Purpose::WildWeights, 0, 0);
        let mut sums = WeightSums::new(n_cells);
        let mut mean = vec![0.0; n_cells];
        let mut var = vec![0.0; n_cells];
        let mut scratch: Vec<WaldScratch> = terms.iter().map(|&t| data.forms[t].scratch()).collect();
        let mut exceed = vec![0u64; terms.len()];
        let mut undefined = vec![0u64; terms.len()];
        for b in task.first..task.hi {
            weight_sums(data, &mut stream, mammen, &mut sums);
            if b < task.lo {
                continue;
            }
            for (k, &t) in terms.iter().enumerate() {
                let observed = data.observed[t].unwrap_or(f64::INFINITY);
                match f_star(data, t, &sums, &mut mean, &mut var, &mut scratch[k]) {
                    Some(f) => {
                        if mc::exceeds(f, observed) {
                            exceed[k] += 1;
                        }
                    }
                    None => {
                        undefined[k] += 1;
                        exceed[k] += 1;
                    }
                }
            }
        }
        progress.advance(task.hi - task.lo);
        (exceed, undefined)
    });
    let mut exceed = vec![0u64; terms.len()];
    let mut undefined = vec![0u64; terms.len()];
    for (e, u) in per_chunk {
        for k in 0..terms.len() {
            exceed[k] += e[k];
            undefined[k] += u[k];
        }
    }
    (exceed, undefined)
}

/// Cells that make the HC3 covariance undefined, in words.
fn defects(design: &Design) -> Vec<String> {
    let mut out = Vec::new();
    for c in 0..design.n_cells() {
        let values = design.cell_values(c);
        let name = design.layout.cell_name(c);
        if values.len() < 2 {
            out.push(format!("cell {name} has n = 1: the HC3 covariance of its mean is undefined"));
        } else if values.iter().all(|&x| x == values[0]) {
            out.push(format!("cell {name} has zero variance (all values equal): the HC3 covariance of its mean is 0"));
        }
    }
    out
}

fn join(defects: &[String]) -> String {
    let mut text = defects.iter().take(NAMED_CELLS).cloned().collect::<Vec<_>>().join("; ");
    if defects.len() > NAMED_CELLS {
        text.push_str(&format!("; and {} more cell(s)", defects.len() - NAMED_CELLS));
    }
    text
}

fn settings_map(s: &Settings) -> BTreeMap<String, serde_json::Value> {
    let mut m = BTreeMap::new();
    m.insert("ss_type".to_string(), json!(3));
    m.insert("statistic".to_string(), json!("HC3 Wald F of the term's Type III hypothesis"));
    m.insert("reference".to_string(), json!("wild bootstrap under the null: restricted fit without the term"));
    m.insert("wild_weights".to_string(), json!(s.wild_weights.id()));
    m.insert("resamples".to_string(), json!(s.resamples));
    m.insert("max_resamples".to_string(), json!(s.max_permutations.max(s.resamples)));
    m.insert("seed".to_string(), json!(s.seed));
    m.insert("alpha".to_string(), json!(s.alpha));
    m.insert("ci_level".to_string(), json!(s.ci_level));
    m.insert("trim".to_string(), json!(s.trim));
    m.insert("intervals".to_string(), json!("stratified bootstrap within cells; percentile and BCa"));
    m
}

/// The interval of `family` for `term` as an effect: BCa where defined, else percentile
/// (with a note saying so).
fn effect_of(
    rows: &[BootstrapInterval],
    family: IntervalFamily,
    term: &str,
    name: &str,
    level: f64,
) -> Option<(Effect, Option<String>)> {
    let row = rows.iter().find(|r| r.family == family && r.term.as_deref() == Some(term))?;
    let (ends, note) = match (&row.bca, &row.percentile) {
        (Some(b), _) => (Some(b), None),
        (None, Some(p)) => (
            Some(p),
            Some(format!(
                "{name}: BCa interval undefined ({}); the percentile interval is shown",
                row.bca_problem.as_deref().unwrap_or("unknown reason")
            )),
        ),
        (None, None) => (None, None),
    };
    Some((
        Effect {
            name: name.to_string(),
            value: row.estimate,
            ci_low: ends.and_then(|e| e.low),
            ci_high: ends.and_then(|e| e.high),
            ci_level: ends.map(|_| level),
        },
        note,
    ))
}

impl Engine for Bootstrap {
    fn id(&self) -> &'static str {
        "bootstrap"
    }

    fn run(&self, ctx: &Context<'_>) -> Result<EngineResult> {
        let design = ctx.design;
        let fit = ctx.fit;
        let settings = ctx.settings;
        let n_cells = design.n_cells();
        let mut result = EngineResult {
            engine: self.id().to_string(),
            settings: settings_map(settings),
            terms: Vec::new(),
            details: None,
            notes: Vec::new(),
        };
        if n_cells > DENSE_CELL_LIMIT {
            result.terms = super::all_not_applicable(
                design,
                &format!(
                    "the design has {n_cells} cells; the Wald forms are dense and limited to {DENSE_CELL_LIMIT} cells"
                ),
            );
            return Ok(result);
        }
        let forms: Vec<WaldForm> = (0..design.terms().len()).map(|t| WaldForm::new(&design.layout, t)).collect();
        let problems = defects(design);
        let work: Vec<f64> = forms
            .iter()
            .map(|f| {
                let q = f.q() as f64;
                settings.resamples as f64 * (q * q * q / 3.0 + q * q * n_cells as f64)
            })
            .collect();
        let (observed, counts) = if problems.is_empty() {
            let mut observed = observed_f(fit, &forms);
            for (o, w) in observed.iter_mut().zip(&work) {
                if *w > WILD_WORK_LIMIT {
                    *o = None;
                }
            }
            let counts = wild_test(design, fit, &forms, &observed, settings)?;
            (observed, counts)
        } else {
            (vec![None; forms.len()], vec![None; forms.len()])
        };
        let visibility = Visibility::from_quiet(settings.quiet);
        let rep =
            intervals::replicate(design, fit, ctx.forms, settings.trim, settings.resamples, settings.seed, visibility)?;
        let rows = intervals::summarise(&rep, settings.ci_level);
        let sch = scheme(settings.wild_weights);
        let mut wild_rows = Vec::new();
        for (t, term) in design.terms().iter().enumerate() {
            if !problems.is_empty() {
                result.terms.push(TermResult::not_applicable(&term.name, join(&problems)));
                continue;
            }
            if work[t] > WILD_WORK_LIMIT {
                result.terms.push(TermResult::not_applicable(
                    &term.name,
                    format!(
                        "the term has {} df in {n_cells} cells: its wild bootstrap would take about {:.0e} floating-point operations at {} resamples (limit {WILD_WORK_LIMIT:.0e}); the hc engine tests the same hypothesis",
                        term.df, work[t], settings.resamples
                    ),
                ));
                continue;
            }
            let (Some(f), Some(w)) = (observed[t], counts[t]) else {
                result.terms.push(TermResult::not_applicable(
                    &term.name,
                    "the HC3 covariance of this term's contrast is singular to working precision",
                ));
                continue;
            };
            let mut notes = Vec::new();
            if w.undefined > 0 {
                notes.push(format!(
                    "{} of {} wild-bootstrap resamples gave a singular covariance (F* undefined); they were counted as at least as large as the observed F (conservative)",
                    w.undefined, w.count.resamples
                ));
            }
            let mut effects = Vec::new();
            for (family, name) in [
                (IntervalFamily::PartialEtaSquared, "partial_eta_squared"),
                (IntervalFamily::PartialOmegaSquared, "partial_omega_squared"),
                (IntervalFamily::RobustD, "robust_d"),
            ] {
                if let Some((effect, note)) = effect_of(&rows, family, &term.name, name, settings.ci_level) {
                    effects.push(effect);
                    notes.extend(note);
                }
            }
            wild_rows.push(WildTermRow {
                term: term.name.clone(),
                f: finite(f),
                resamples: w.count.resamples,
                exceedances: w.count.exceedances,
                undefined: w.undefined,
            });
            result.terms.push(TermResult {
                term: term.name.clone(),
                statistic: finite(f),
                df1: Some(term.df as f64),
                df2: None,
                p: finite(w.count.p()),
                decision: Some(w.count.decision(settings.alpha)),
                mc: Some(w.count.to_result(&sch)),
                effect: effects.first().cloned(),
                effects,
                not_applicable: None,
                notes,
            });
        }
        result.notes = vec![
            format!(
                "test: HC3 Wald F of each term's Type III hypothesis; p = (1 + #{{F* ≥ F}})/(B + 1) from the wild bootstrap under the null (restricted fit without the term, restricted residuals times {} weights, seed {})",
                settings.wild_weights.id(),
                settings.seed
            ),
            format!(
                "intervals: {} stratified resamples within cells, {}% percentile and BCa (stratified jackknife acceleration), each end with its Monte Carlo SE; descriptive, never a decision rule (a resampled partial η² is positive, so its interval never contains 0)",
                settings.resamples,
                (settings.ci_level * 100.0 * 1e6).round() / 1e6
            ),
        ];
        result.details = Some(Details::Bootstrap(BootstrapDetails {
            wild_weights: settings.wild_weights.id().to_string(),
            wild: wild_rows,
            resamples: settings.resamples,
            ci_level: settings.ci_level,
            trim: settings.trim,
            mc_error_method: MC_ERROR_METHOD.to_string(),
            intervals: rows,
            omitted: rep.omitted.clone(),
        }));
        Ok(result)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::config::SsType;
    use crate::design::forms::SsForms;
    use crate::design::Factor;
    use crate::resample::{Stream, StreamKey};

    fn factor(name: &str, a: usize) -> Factor {
        Factor {
            name: name.into(),
            levels: (1..=a).map(|i| format!("{}{i}", name.to_lowercase())).collect(),
            measured: false,
        }
    }

    /// METHODS §12.0 cells (invented data).
    fn methods12() -> Design {
        let cells = vec![
            vec![9.6, 10.2, 9.9, 10.0, 9.2],
            vec![9.1, 9.8, 11.3, 9.7, 9.8, 12.1, 10.7],
            vec![11.9, 12.0, 13.5, 15.0, 13.2, 16.2],
            vec![13.8, 9.6, 9.4, 9.9, 9.2, 10.1, 9.8, 9.9],
            vec![10.9, 11.6, 14.8, 14.9, 10.3, 12.6],
            vec![13.4, 14.9, 18.5, 19.2, 12.1, 14.9, 17.6],
        ];
        Design::from_cells("y", vec![factor("A", 2), factor("B", 3)], &cells).unwrap()
    }

    #[test]
    fn projection_gives_the_type_iii_ss_and_a_restricted_fit_in_the_null_space() {
        let d = methods12();
        let fit = Fit::new(&d);
        let forms = SsForms::new(&d.layout, &fit.n, SsType::Three).unwrap();
        for t in 0..3 {
            let form = WaldForm::new(&d.layout, t);
            let p = TermProjection::new(&form, &fit.n, &fit.mean).unwrap();
            let ss = forms.ss(t, &fit.centred_sums);
            assert!((p.ss / ss - 1.0).abs() < 1e-12, "term {t}");
            let delta = p.restricted_shift(&fit.n);
            let weighted: f64 = delta.iter().zip(&fit.n).map(|(x, &n)| n as f64 * x * x).sum();
            assert!((weighted / ss - 1.0).abs() < 1e-12);
            let restricted = restricted_means(&fit, &form).unwrap();
            for r in 0..form.q() {
                let l_mu: f64 = form.row(r).iter().zip(&restricted).map(|(a, b)| a * b).sum();
                assert!(l_mu.abs() < 1e-12, "L μ̃ = {l_mu}");
            }
        }
    }

    #[test]
    fn rank_one_deletion_update_equals_a_recompute() {
        let d = methods12();
        let fit = Fit::new(&d);
        for t in 0..3 {
            let form = WaldForm::new(&d.layout, t);
            let p = TermProjection::new(&form, &fit.n, &fit.mean).unwrap();
            for c in 0..6 {
                for delta in [-0.7, 0.0, 0.31] {
                    let mut mu = fit.mean.clone();
                    mu[c] += delta;
                    let v: Vec<f64> =
                        fit.n.iter().enumerate().map(|(j, &n)| 1.0 / (n - usize::from(j == c)) as f64).collect();
                    let want = form.statistic(&mu, &v, &mut form.scratch()).unwrap();
                    let got = p.ss_after_deletion(c, fit.n[c], delta);
                    assert!((got / want - 1.0).abs() < 1e-11, "t {t} c {c}: {got} vs {want}");
                }
            }
        }
    }

    #[test]
    fn unit_weights_reproduce_the_observed_f() {
        // Property: with every v = 1, y* = μ̃ + ẽ = y, so F* = F.
        let d = methods12();
        let fit = Fit::new(&d);
        let forms: Vec<WaldForm> = (0..3).map(|t| WaldForm::new(&d.layout, t)).collect();
        let observed = observed_f(&fit, &forms);
        for weights in [WildWeights::Rademacher, WildWeights::Mammen] {
            let settings = Settings { wild_weights: weights, ..Settings::default() };
            let data = wild_data(&d, &fit, &forms, &observed, &settings).unwrap();
            let mut s = WeightSums::new(6);
            for c in 0..6 {
                s.ev[c] = data.sum_e[c];
                s.v[c] = data.n[c];
                s.e2v2[c] = data.sum_e2[c];
                s.ev2[c] = data.sum_e[c];
                s.v2[c] = data.n[c];
            }
            let (mut mean, mut var) = (vec![0.0; 6], vec![0.0; 6]);
            for t in 0..3 {
                let f = f_star(&data, t, &s, &mut mean, &mut var, &mut forms[t].scratch()).unwrap();
                assert!((f / observed[t].unwrap() - 1.0).abs() < 1e-12, "{weights:?} term {t}");
            }
        }
    }

    #[test]
    fn mammen_weights_have_the_stated_moments_in_the_stream() {
        // Exact two-point moments E v = 0, E v² = 1, E v³ = 1 (Mammen 1993; METHODS §8.6),
        // and the sample moments of 10⁶ draws from quorum's uniform stream within 5 SE.
        let (low, high, p) = mammen_weights();
        let m = |k: i32| p * low.powi(k) + (1.0 - p) * high.powi(k);
        assert!(m(1).abs() < 1e-15 && (m(2) - 1.0).abs() < 1e-15 && (m(3) - 1.0).abs() < 1e-15);
        let mut s = Stream::new(9, StreamKey { purpose: Purpose::Auxiliary, term: 0, chunk: 0, aux: 7 });
        let n = 1_000_000;
        let (mut s1, mut s2, mut s3) = (0.0, 0.0, 0.0);
        for _ in 0..n {
            let v = if s.uniform() < p { low } else { high };
            s1 += v;
            s2 += v * v;
            s3 += v * v * v;
        }
        let nf = n as f64;
        // sd of v, v², v³: 1, √(E v⁴ − 1) = 1, √(E v⁶ − 1) = 2 (E v⁴ = 2, E v⁶ = 5).
        assert!((s1 / nf).abs() < 5.0 / nf.sqrt());
        assert!((s2 / nf - 1.0).abs() < 5.0 / nf.sqrt());
        assert!((s3 / nf - 1.0).abs() < 5.0 * 2.0 / nf.sqrt());
    }
}
