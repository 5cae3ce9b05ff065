//! Permutation F tests of every main effect and interaction (METHODS §3.1–3.5), engine
//! id `permutation`.
//!
//! The statistic is the classical Type III F of each term; its null distribution comes
//! from rearranging the observations over the cells under one of three schemes
//! (`--permutation-scheme`):
//!
//! * **Freedman–Lane** (default; Freedman & Lane 1983): permute the residuals e₀ of the
//!   model without the term and add them to its fitted values. With the saturated
//!   model the full-model residuals of y* are those of Pe₀, so only the cell sums
//!   u = Z'Pe₀ are needed: F* = (u'Q_S u/q)/((Σe₀² − u'D⁻¹u)/df_E).
//! * **ter Braak** (1992): permute the full-model residuals e_F, same formula.
//! * **Manly** (2007): permute the raw outcome (centred at the grand mean).
//!
//! Why this shape: one resample must cost O(N) plus O(C·q) per term. Each scheme
//! turns its data into one record per observation in canonical order; the shared
//! machinery of [`crate::resample::permute`] rearranges the records (identical
//! permutations for every term and for the `studentized-permutation` engine) and this
//! file sums contiguous cell ranges and evaluates each term's quadratic form from
//! [`SsForms::dense`] with per-chunk buffers. Freedman–Lane needs a different residual
//! vector per term, e₀ = e_F + Zδ_S with δ_S = Q_S s (the shift from the full to the
//! reduced fit, constant within cells), so its record is (e_F,i, cell of i) and
//! u_S = Z'Pe_F + K δ_S, where `K[c][d]` counts the observations of original cell d that
//! land in cell c; when C² is large against N, u_S is summed per term instead. Above
//! the dense limit the forms fall back to [`SsForms::ss`] (allocating, but exact) and
//! δ_S is solved by conjugate gradients on the Kronecker operators.

use super::{all_not_applicable, Context, Engine};
use crate::config::{PermutationScheme, TailApproximation};
use crate::design::forms::SsForms;
use crate::design::kron::{self, Small};
use crate::error::Result;
use crate::model::Fit;
use crate::resample::permute::{self, ArrangedStatistic, Plan, TermOutcome};
use crate::resample::progress::{Progress, Visibility};
use crate::resample::tail;
use crate::results::{finite, Details, Effect, EngineResult, NullDistribution, TermResult};
use serde_json::json;
use std::collections::BTreeMap;

/// The permutation F engine (id `permutation`).
pub struct Permutation;

/// Engine code in the auxiliary streams of the tail fits (keeps them apart from the
/// studentized engine's).
const TAIL_STREAM_AUX: u64 = 1;

impl Engine for Permutation {
    fn id(&self) -> &'static str {
        "permutation"
    }

    fn run(&self, ctx: &Context<'_>) -> Result<EngineResult> {
        let settings = ctx.settings;
        let scheme = settings.permutation_scheme;
        let mut settings_out = BTreeMap::new();
        settings_out.insert("ss_type".to_string(), json!(3));
        settings_out.insert("statistic".to_string(), json!("F"));
        settings_out.insert("scheme".to_string(), json!(scheme.id()));
        settings_out.insert("permutations".to_string(), json!(settings.permutations));
        settings_out.insert("max_permutations".to_string(), json!(settings.max_permutations));
        settings_out.insert("alpha".to_string(), json!(settings.alpha));
        settings_out.insert("seed".to_string(), json!(settings.seed));
        settings_out.insert(
            "tail_approximation".to_string(),
            json!(settings.tail_approximation == TailApproximation::GeneralizedPareto),
        );
        let mut result = EngineResult {
            engine: self.id().to_string(),
            settings: settings_out,
            terms: Vec::new(),
            details: None,
            notes: vec![scheme_note(scheme, ctx.design.factors().len())],
        };
        if settings.permutations == 0 {
            result.terms =
                all_not_applicable(ctx.design, "no permutations requested (B = 0; give --permutations 1 or more)");
            return Ok(result);
        }
        let fit = ctx.fit;
        if fit.df_error == 0 {
            result.terms =
                all_not_applicable(ctx.design, "no residual degrees of freedom (every cell has one observation)");
            return Ok(result);
        }
        if fit.sse <= 0.0 {
            result.terms =
                all_not_applicable(ctx.design, "zero residual variance (every cell is constant): F is undefined");
            return Ok(result);
        }
        let tests = PermutationTests::new(ctx, scheme);
        let progress = Progress::new(self.id(), settings.permutations, Visibility::from_quiet(settings.quiet));
        let plan = Plan {
            resamples: settings.permutations,
            max_resamples: settings.max_permutations,
            alpha: settings.alpha,
            seed: settings.seed,
        };
        let observed: Vec<Option<f64>> = tests.observed.iter().map(|&f| finite(f)).collect();
        let outcomes = tests.run(&observed, &plan, &progress);
        progress.finish();
        let scheme_exact = scheme_is_exact(scheme, ctx.design.factors().len());
        let mut nulls = Vec::new();
        for (t, term) in ctx.design.terms().iter().enumerate() {
            let Some(outcome) = &outcomes[t] else {
                result.terms.push(TermResult::not_applicable(&term.name, "the observed F is not finite"));
                continue;
            };
            let f_obs = tests.observed[t];
            let ss = tests.ss[t];
            let tail = tail::for_outcome(
                settings.tail_approximation,
                outcome,
                f_obs,
                settings.seed,
                t as u64 + 1,
                TAIL_STREAM_AUX,
            );
            let mut notes = outcome.notes(settings.alpha, settings.max_permutations);
            notes.extend(tail.as_ref().and_then(tail::note));
            if scheme == PermutationScheme::TerBraak && outcome.exact {
                notes.push(
                    "ter Braak: the observed arrangement of the full-model residuals has F = 0, so it need not count"
                        .to_string(),
                );
            }
            result.terms.push(TermResult {
                term: term.name.clone(),
                statistic: finite(f_obs),
                df1: Some(term.df as f64),
                df2: Some(fit.df_error as f64),
                p: finite(outcome.p()),
                decision: Some(outcome.decision(settings.alpha)),
                mc: Some(outcome.monte_carlo(scheme.id(), Some(scheme_exact))),
                effect: Some(Effect::point("partial_eta_squared", ss / (ss + fit.sse))),
                effects: vec![Effect::point("partial_eta_squared", ss / (ss + fit.sse))],
                not_applicable: None,
                notes,
            });
            nulls.push(NullDistribution {
                term: term.name.clone(),
                statistic: "F".into(),
                observed: finite(f_obs),
                resamples: outcome.statistics.len() as u64,
                exact: outcome.exact,
                quantiles: outcome.quantiles(),
                degenerate: outcome.degenerate,
                asymptotic_p: None,
                tail,
            });
        }
        result.details = Some(Details::Permutation { terms: nulls });
        Ok(result)
    }
}

/// Whether the scheme gives an exact test of a single term (METHODS §3.2): only with
/// one factor, where the null model is the intercept and Freedman–Lane equals Manly.
pub fn scheme_is_exact(scheme: PermutationScheme, factors: usize) -> bool {
    match scheme {
        PermutationScheme::FreedmanLane | PermutationScheme::Manly => factors == 1,
        PermutationScheme::TerBraak => false,
    }
}

fn scheme_note(scheme: PermutationScheme, factors: usize) -> String {
    let exact = scheme_is_exact(scheme, factors);
    match scheme {
        PermutationScheme::FreedmanLane if exact => {
            "Freedman–Lane permutation of residuals (one factor: the null model is the intercept, so this is the exact one-way permutation test); assumes exchangeable errors (equal variances and shapes)".into()
        }
        PermutationScheme::FreedmanLane => {
            "Freedman–Lane permutation of the residuals of the model without each term: approximate but asymptotically exact, closest to nominal in published simulations (Anderson & Legendre 1999; Winkler et al. 2014); assumes exchangeable errors (equal variances and shapes)".into()
        }
        PermutationScheme::TerBraak => {
            "ter Braak permutation of full-model residuals: approximate, asymptotically exact; assumes exchangeable errors (equal variances and shapes)".into()
        }
        PermutationScheme::Manly if exact => {
            "Manly permutation of the raw outcome: with one factor, the exact one-way permutation test of identical distributions".into()
        }
        PermutationScheme::Manly => {
            "Manly permutation of the raw outcome: exact only for the global null that no factor has any effect; for one term of a factorial with other effects present it is approximate and can be badly off".into()
        }
    }
}

/// Everything the permutation F tests of one design need, computed once.
pub struct PermutationTests<'a> {
    forms: &'a SsForms,
    scheme: PermutationScheme,
    /// Observed Type III F of every term.
    pub observed: Vec<f64>,
    /// Observed Type III SS of every term.
    pub ss: Vec<f64>,
    sizes: Vec<usize>,
    n: Vec<f64>,
    starts: Vec<usize>,
    df: Vec<f64>,
    df_error: f64,
    /// Manly: centred outcome; ter Braak and Freedman–Lane: full-model residuals.
    values: Vec<f64>,
    /// Σ values² (Manly, ter Braak).
    sum_sq: f64,
    /// Freedman–Lane: δ_S of every term (C each) and Σe₀² = SSE + Σ n_c δ_c².
    shifts: Vec<Vec<f64>>,
    reduced_sum_sq: Vec<f64>,
    cells: Vec<u32>,
    accumulation: Accumulation,
}

/// How Freedman–Lane obtains each term's permuted cell sums.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Accumulation {
    /// One pass for Z'Pe_F and the C×C count matrix K, then u_S = Z'Pe_F + Kδ_S.
    CellCounts,
    /// One pass for Z'Pe_F, then one pass per term adding δ_S of each record's cell.
    PerTerm,
}

/// A permuted error sum of squares below this fraction of the permuted vector's sum of
/// squares is rounding noise around zero: F* is then +∞ (it counts as an exceedance).
pub const ZERO_ERROR_REL: f64 = 1e-12;

/// A Freedman–Lane record: an observation's full-model residual and its original cell.
#[derive(Debug, Clone, Copy)]
pub struct Tagged {
    /// Full-model residual e_F,i.
    pub value: f64,
    /// Original cell of the observation.
    pub cell: u32,
}

impl<'a> PermutationTests<'a> {
    /// Prepares the tests of `ctx`'s design under `scheme` (F statistics of the fit,
    /// residuals, Freedman–Lane shifts).
    pub fn new(ctx: &Context<'a>, scheme: PermutationScheme) -> PermutationTests<'a> {
        let (design, fit, forms) = (ctx.design, ctx.fit, ctx.forms);
        let sizes = design.cell_sizes();
        let n: Vec<f64> = sizes.iter().map(|&v| v as f64).collect();
        let mut starts = Vec::with_capacity(sizes.len() + 1);
        starts.push(0);
        for c in 0..sizes.len() {
            starts.push(design.cell_range(c).end);
        }
        let df: Vec<f64> = design.terms().iter().map(|t| t.df as f64).collect();
        let df_error = fit.df_error as f64;
        let ss = fit.term_ss(forms);
        let observed: Vec<f64> = ss.iter().zip(&df).map(|(s, d)| (s / d) / (fit.sse / df_error)).collect();
        let mut values = Vec::with_capacity(design.n_obs());
        let mut cells = Vec::with_capacity(design.n_obs());
        for c in 0..sizes.len() {
            for &y in design.cell_values(c) {
                values.push(match scheme {
                    PermutationScheme::Manly => y - fit.grand_mean,
                    PermutationScheme::TerBraak | PermutationScheme::FreedmanLane => y - fit.mean[c],
                });
                cells.push(c as u32);
            }
        }
        let sum_sq = values.iter().map(|v| v * v).sum();
        let (shifts, reduced_sum_sq) = if scheme == PermutationScheme::FreedmanLane {
            let shifts: Vec<Vec<f64>> = design
                .terms()
                .iter()
                .enumerate()
                .map(|(t, term)| reduced_fit_shift(design.shape(), &term.factors, forms, t, fit, &n))
                .collect();
            let sums: Vec<f64> =
                shifts.iter().map(|d| sum_sq + d.iter().zip(&n).map(|(x, m)| m * x * x).sum::<f64>()).collect();
            (shifts, sums)
        } else {
            (Vec::new(), Vec::new())
        };
        let (c, t, big_n) = (sizes.len(), forms.n_terms(), design.n_obs());
        let accumulation = if c * c * (t + 1) <= t.saturating_sub(1) * big_n {
            Accumulation::CellCounts
        } else {
            Accumulation::PerTerm
        };
        PermutationTests {
            forms,
            scheme,
            observed,
            ss,
            sizes,
            n,
            starts,
            df,
            df_error,
            values,
            sum_sq,
            shifts,
            reduced_sum_sq,
            cells,
            accumulation,
        }
    }

    /// Chooses the Freedman–Lane accumulation (tests compare the two).
    pub fn with_accumulation(mut self, accumulation: Accumulation) -> Self {
        self.accumulation = accumulation;
        self
    }

    /// The permutation tests of every term whose `observed` statistic exists.
    pub fn run(&self, observed: &[Option<f64>], plan: &Plan, progress: &Progress) -> Vec<Option<TermOutcome>> {
        match self.scheme {
            PermutationScheme::FreedmanLane => {
                let records: Vec<Tagged> =
                    self.values.iter().zip(&self.cells).map(|(&value, &cell)| Tagged { value, cell }).collect();
                permute::test_terms(self, &records, &self.sizes, observed, plan, progress)
            }
            PermutationScheme::TerBraak | PermutationScheme::Manly => {
                let shared = SharedVector(self);
                permute::test_terms(&shared, &self.values, &self.sizes, observed, plan, progress)
            }
        }
    }

    /// The statistics of every term for one rearrangement of the scheme's records,
    /// given as a permutation `a` of canonical indices (tests and benches).
    pub fn statistics_for(&self, a: &[usize]) -> Vec<f64> {
        let all: Vec<usize> = (0..self.df.len()).collect();
        let mut out = vec![0.0; all.len()];
        match self.scheme {
            PermutationScheme::FreedmanLane => {
                let records: Vec<Tagged> =
                    a.iter().map(|&i| Tagged { value: self.values[i], cell: self.cells[i] }).collect();
                self.evaluate(&records, &all, &mut self.scratch(), &mut out);
            }
            _ => {
                let shared = SharedVector(self);
                let records: Vec<f64> = a.iter().map(|&i| self.values[i]).collect();
                shared.evaluate(&records, &all, &mut shared.scratch(), &mut out);
            }
        }
        out
    }

    /// F = (SS/q)/(SSE/df_E) from the term's SS and the permuted SSE; +∞ when the
    /// permuted SSE vanishes, i.e. is below [`ZERO_ERROR_REL`] of the permuted vector's
    /// sum of squares `total` (a rearrangement with no residual variation: e.g. the few
    /// non-zero residuals all landing in cells of one observation).
    #[inline]
    fn f_ratio(&self, t: usize, ss: f64, sse: f64, total: f64) -> f64 {
        if sse <= ZERO_ERROR_REL * total {
            return f64::INFINITY;
        }
        (ss / self.df[t]) / (sse / self.df_error)
    }

    /// u'D⁻¹u.
    #[inline]
    fn between(&self, u: &[f64]) -> f64 {
        u.iter().zip(&self.n).map(|(a, m)| a * a / m).sum()
    }

    /// u'Q_S u: the dense factor without allocation, else the matrix-free form.
    #[inline]
    fn term_ss(&self, t: usize, u: &[f64]) -> f64 {
        match self.forms.dense(t) {
            Some((x, q)) => {
                let c = u.len();
                let mut ss = 0.0;
                for r in 0..q {
                    let row = &x[r * c..(r + 1) * c];
                    let v: f64 = row.iter().zip(u).map(|(a, b)| a * b).sum();
                    ss += v * v;
                }
                ss
            }
            None => self.forms.ss(t, u),
        }
    }
}

/// Per-chunk work space of the F statistics.
pub struct Scratch {
    base: Vec<f64>,
    u: Vec<f64>,
    counts: Vec<u32>,
}

impl ArrangedStatistic<Tagged> for PermutationTests<'_> {
    type Scratch = Scratch;

    fn scratch(&self) -> Scratch {
        let c = self.n.len();
        let counts = if self.accumulation == Accumulation::CellCounts { vec![0; c * c] } else { Vec::new() };
        Scratch { base: vec![0.0; c], u: vec![0.0; c], counts }
    }

    fn evaluate(&self, arranged: &[Tagged], active: &[usize], s: &mut Scratch, out: &mut [f64]) {
        let c_n = self.n.len();
        match self.accumulation {
            Accumulation::CellCounts => {
                s.counts.fill(0);
                for c in 0..c_n {
                    let row = &mut s.counts[c * c_n..(c + 1) * c_n];
                    let mut sum = 0.0;
                    for r in &arranged[self.starts[c]..self.starts[c + 1]] {
                        sum += r.value;
                        row[r.cell as usize] += 1;
                    }
                    s.base[c] = sum;
                }
                for (j, &t) in active.iter().enumerate() {
                    let shift = &self.shifts[t];
                    for c in 0..c_n {
                        let row = &s.counts[c * c_n..(c + 1) * c_n];
                        let moved: f64 = row.iter().zip(shift).map(|(&k, d)| k as f64 * d).sum();
                        s.u[c] = s.base[c] + moved;
                    }
                    let sse = self.reduced_sum_sq[t] - self.between(&s.u);
                    out[j] = self.f_ratio(t, self.term_ss(t, &s.u), sse, self.reduced_sum_sq[t]);
                }
            }
            Accumulation::PerTerm => {
                for c in 0..c_n {
                    s.base[c] = arranged[self.starts[c]..self.starts[c + 1]].iter().map(|r| r.value).sum();
                }
                for (j, &t) in active.iter().enumerate() {
                    let shift = &self.shifts[t];
                    for c in 0..c_n {
                        let moved: f64 =
                            arranged[self.starts[c]..self.starts[c + 1]].iter().map(|r| shift[r.cell as usize]).sum();
                        s.u[c] = s.base[c] + moved;
                    }
                    let sse = self.reduced_sum_sq[t] - self.between(&s.u);
                    out[j] = self.f_ratio(t, self.term_ss(t, &s.u), sse, self.reduced_sum_sq[t]);
                }
            }
        }
    }
}

/// ter Braak and Manly: one permuted vector shared by every term.
struct SharedVector<'a, 'b>(&'b PermutationTests<'a>);

impl ArrangedStatistic<f64> for SharedVector<'_, '_> {
    type Scratch = Scratch;

    fn scratch(&self) -> Scratch {
        let c = self.0.n.len();
        Scratch { base: vec![0.0; c], u: Vec::new(), counts: Vec::new() }
    }

    fn evaluate(&self, arranged: &[f64], active: &[usize], s: &mut Scratch, out: &mut [f64]) {
        let p = self.0;
        for c in 0..p.n.len() {
            s.base[c] = arranged[p.starts[c]..p.starts[c + 1]].iter().sum();
        }
        let sse = p.sum_sq - p.between(&s.base);
        for (j, &t) in active.iter().enumerate() {
            out[j] = p.f_ratio(t, p.term_ss(t, &s.base), sse, p.sum_sq);
        }
    }
}

/// δ_S = Q_S s: the cell-wise shift from the full fit (cell means) to the fit of the
/// model without term S, μ̂ − μ̂₀ = D⁻¹L'(LD⁻¹L')⁻¹Lμ̂ (METHODS §1.2, §3.1), for the
/// centred cell sums s. Dense: δ = X'(Xs) with Q_S = X'X. Above the dense limit:
/// conjugate gradients on the Kronecker-structured LD⁻¹L', preconditioned by
/// (LL')⁻¹·n̄ (n̄ the harmonic mean cell size).
pub fn reduced_fit_shift(shape: &[usize], term: &[usize], forms: &SsForms, t: usize, fit: &Fit, n: &[f64]) -> Vec<f64> {
    let s = &fit.centred_sums;
    let c = s.len();
    if let Some((x, q)) = forms.dense(t) {
        let mut delta = vec![0.0; c];
        for r in 0..q {
            let row = &x[r * c..(r + 1) * c];
            let v: f64 = row.iter().zip(s).map(|(a, b)| a * b).sum();
            for (d, a) in delta.iter_mut().zip(row) {
                *d += a * v;
            }
        }
        return delta;
    }
    let l = kron::hypothesis_blocks(shape, term);
    let lt = kron::transposed(&l);
    let mu: Vec<f64> = s.iter().zip(n).map(|(a, b)| a / b).collect();
    let rhs = kron::kron_apply(&kron::refs(&l), &mu);
    let n_bar = n.len() as f64 / n.iter().map(|v| 1.0 / v).sum::<f64>();
    let inv = gram_inverse(shape, term);
    let z = conjugate_gradients(
        |v| {
            let mut w = kron::kron_apply(&kron::refs(&lt), v);
            for (wi, ni) in w.iter_mut().zip(n) {
                *wi /= ni;
            }
            kron::kron_apply(&kron::refs(&l), &w)
        },
        |v| kron::kron_apply(&kron::refs(&inv), v).into_iter().map(|x| x * n_bar).collect(),
        &rhs,
    );
    let mut delta = kron::kron_apply(&kron::refs(&lt), &z);
    for (d, ni) in delta.iter_mut().zip(n) {
        *d /= ni;
    }
    delta
}

/// Blocks of (LL')⁻¹: I − J/a for a factor in the term ((HH')⁻¹), 1/a otherwise.
fn gram_inverse(shape: &[usize], term: &[usize]) -> Vec<Small> {
    shape
        .iter()
        .enumerate()
        .map(|(f, &a)| {
            if term.contains(&f) {
                let m = a - 1;
                let mut data = vec![-1.0 / a as f64; m * m];
                for i in 0..m {
                    data[i * m + i] += 1.0;
                }
                Small { rows: m, cols: m, data }
            } else {
                Small { rows: 1, cols: 1, data: vec![1.0 / a as f64] }
            }
        })
        .collect()
}

/// Preconditioned conjugate gradients for a symmetric positive definite operator,
/// to a relative residual of 1e-15 (or 10·dim + 100 iterations).
fn conjugate_gradients(
    apply: impl Fn(&[f64]) -> Vec<f64>,
    precondition: impl Fn(&[f64]) -> Vec<f64>,
    b: &[f64],
) -> Vec<f64> {
    let dim = b.len();
    let mut x = vec![0.0; dim];
    let b_norm = b.iter().map(|v| v * v).sum::<f64>().sqrt();
    if b_norm == 0.0 {
        return x;
    }
    let mut r = b.to_vec();
    let mut z = precondition(&r);
    let mut p = z.clone();
    let mut rz: f64 = r.iter().zip(&z).map(|(a, c)| a * c).sum();
    for _ in 0..10 * dim + 100 {
        let ap = apply(&p);
        let pap: f64 = p.iter().zip(&ap).map(|(a, c)| a * c).sum();
        if pap <= 0.0 {
            break;
        }
        let alpha = rz / pap;
        for i in 0..dim {
            x[i] += alpha * p[i];
            r[i] -= alpha * ap[i];
        }
        if r.iter().map(|v| v * v).sum::<f64>().sqrt() <= 1e-15 * b_norm {
            break;
        }
        z = precondition(&r);
        let rz_new: f64 = r.iter().zip(&z).map(|(a, c)| a * c).sum();
        let beta = rz_new / rz;
        rz = rz_new;
        for i in 0..dim {
            p[i] = z[i] + beta * p[i];
        }
    }
    x
}

#[cfg(test)]
#[allow(clippy::needless_range_loop)]
mod tests {
    use super::*;
    use crate::config::{Settings, SsType};
    use crate::design::forms::Strategy as FormStrategy;
    use crate::design::{Design, Factor};
    use crate::model::ols;
    use crate::resample::{Purpose, Stream, StreamKey};
    use nalgebra::DVector;
    use proptest::prelude::*;

    /// Relative agreement of the fast path with a full refit (the 1e-9), with an
    /// absolute floor for F values near zero.
    const REFIT_REL: f64 = 1e-9;
    const REFIT_ABS: f64 = 1e-12;

    fn design(shape: &[usize], cells: &[Vec<f64>]) -> Design {
        let names = ["A", "B", "C"];
        let factors = shape
            .iter()
            .enumerate()
            .map(|(f, &a)| Factor {
                name: names[f].into(),
                levels: (0..a).map(|i| format!("l{i}")).collect(),
                measured: false,
            })
            .collect();
        Design::from_cells("y", factors, cells).unwrap()
    }

    /// Residuals of y on the intercept and `terms` by Householder QR (the slow reference).
    fn residuals(d: &Design, y: &[f64], terms: &[usize]) -> Vec<f64> {
        let x = ols::model_matrix(d, terms);
        let q = x.qr().q();
        let yv = DVector::from_column_slice(y);
        let fitted = &q * (q.transpose() * &yv);
        (yv - fitted).iter().copied().collect()
    }

    /// Type III F of term t by refitting the sum-coded models (statsmodels' way).
    fn refit_f(d: &Design, y: &[f64], t: usize) -> f64 {
        let ss = ols::refit_ss(d, y, t, SsType::Three);
        let all: Vec<usize> = (0..d.terms().len()).collect();
        let sse = ols::rss(&ols::model_matrix(d, &all), y);
        let df_e = (d.n_obs() - d.n_cells()) as f64;
        (ss / d.terms()[t].df as f64) / (sse / df_e)
    }

    fn random_permutation(n: usize, seed: u64) -> Vec<usize> {
        let mut s = Stream::new(seed, StreamKey { purpose: Purpose::Auxiliary, term: 77, chunk: 0, aux: 0 });
        let mut a: Vec<usize> = (0..n).collect();
        s.shuffle(&mut a);
        a
    }

    fn close(a: f64, b: f64) -> bool {
        a == b || (a - b).abs() <= REFIT_ABS + REFIT_REL * b.abs()
    }

    /// A random design: shape, cell values (every cell non-empty, some cell with n ≥ 2).
    fn random_design() -> impl Strategy<Value = (Vec<usize>, Vec<Vec<f64>>)> {
        prop::sample::select(vec![vec![3], vec![2, 2], vec![2, 3], vec![3, 2, 2]]).prop_flat_map(|shape| {
            let c: usize = shape.iter().product();
            let cell = prop::collection::vec(-50.0f64..50.0, 1..6);
            (
                Just(shape),
                prop::collection::vec(cell, c)
                    .prop_filter("residual df", |cells| cells.iter().map(Vec::len).sum::<usize>() > cells.len()),
            )
        })
    }

    fn check_scheme(shape: &[usize], cells: &[Vec<f64>], scheme: PermutationScheme, seed: u64) {
        let d = design(shape, cells);
        let fit = Fit::new(&d);
        let forms = SsForms::new(&d.layout, &fit.n, SsType::Three).unwrap();
        let settings = Settings::default();
        let ctx = Context { design: &d, fit: &fit, forms: &forms, settings: &settings };
        let tests = PermutationTests::new(&ctx, scheme);
        let a = random_permutation(d.n_obs(), seed);
        let fast = tests.statistics_for(&a);
        let y = d.y();
        let all: Vec<usize> = (0..d.terms().len()).collect();
        let e_full = residuals(&d, y, &all);
        for t in 0..d.terms().len() {
            let y_star: Vec<f64> = match scheme {
                PermutationScheme::FreedmanLane => {
                    let reduced: Vec<usize> = all.iter().copied().filter(|&u| u != t).collect();
                    let e0 = residuals(&d, y, &reduced);
                    (0..y.len()).map(|i| (y[i] - e0[i]) + e0[a[i]]).collect()
                }
                PermutationScheme::TerBraak => a.iter().map(|&i| e_full[i]).collect(),
                PermutationScheme::Manly => a.iter().map(|&i| y[i]).collect(),
            };
            let slow = refit_f(&d, &y_star, t);
            let sse = ols::rss(&ols::model_matrix(&d, &all), &y_star);
            let total: f64 = y_star.iter().map(|v| v * v).sum();
            if sse <= 1e-11 * total {
                // No residual variation left (rounding noise in both): F* is infinite.
                assert!(fast[t] > 1e9, "{scheme:?} term {t}: {} for a vanishing SSE", fast[t]);
                continue;
            }
            assert!(close(fast[t], slow), "{scheme:?} term {t}: fast {} vs refit {}", fast[t], slow);
        }
        // The two Freedman–Lane accumulations agree.
        if scheme == PermutationScheme::FreedmanLane {
            let other = match tests.accumulation {
                Accumulation::CellCounts => Accumulation::PerTerm,
                Accumulation::PerTerm => Accumulation::CellCounts,
            };
            let again = PermutationTests::new(&ctx, scheme).with_accumulation(other).statistics_for(&a);
            for t in 0..fast.len() {
                assert!(close(again[t], fast[t]), "accumulations differ: {} vs {}", again[t], fast[t]);
            }
        }
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(96))]
        #[test]
        fn cell_sum_fast_path_equals_a_full_refit((shape, cells) in random_design(), seed in any::<u64>()) {
            // Property (METHODS §3.1 shortcut vs statsmodels-style refit): for random
            // designs, data and permutations, F* from cell sums and the dense forms equals
            // the Type III F of the permuted data refitted by QR, for every scheme.
            for scheme in [PermutationScheme::FreedmanLane, PermutationScheme::TerBraak, PermutationScheme::Manly] {
                check_scheme(&shape, &cells, scheme, seed);
            }
        }
    }

    fn unbalanced_2x3() -> (Vec<usize>, Vec<Vec<f64>>) {
        // METHODS §12.0 cells (invented data).
        (
            vec![2, 3],
            vec![
                vec![9.6, 10.2, 9.9, 10.0, 9.2],
                vec![9.1, 9.8, 11.3, 9.7, 9.8, 12.1, 10.7],
                vec![11.9, 12.0, 13.5, 15.0, 13.2, 16.2],
                vec![13.8, 9.6, 9.4, 9.9, 9.2, 10.1, 9.8, 9.9],
                vec![10.9, 11.6, 14.8, 14.9, 10.3, 12.6],
                vec![13.4, 14.9, 18.5, 19.2, 12.1, 14.9, 17.6],
            ],
        )
    }

    #[test]
    fn identity_rearrangement_gives_the_observed_f() {
        let (shape, cells) = unbalanced_2x3();
        let d = design(&shape, &cells);
        let fit = Fit::new(&d);
        let forms = SsForms::new(&d.layout, &fit.n, SsType::Three).unwrap();
        let settings = Settings::default();
        let ctx = Context { design: &d, fit: &fit, forms: &forms, settings: &settings };
        let id: Vec<usize> = (0..d.n_obs()).collect();
        for scheme in [PermutationScheme::FreedmanLane, PermutationScheme::Manly] {
            let tests = PermutationTests::new(&ctx, scheme);
            let f = tests.statistics_for(&id);
            for t in 0..3 {
                assert!(close(f[t], tests.observed[t]), "{scheme:?}: {} vs {}", f[t], tests.observed[t]);
            }
        }
        // ter Braak: the full-model residuals have zero cell sums, so F = 0 at the identity
        // (up to the rounding of those sums).
        let f = PermutationTests::new(&ctx, PermutationScheme::TerBraak).statistics_for(&id);
        assert!(f.iter().all(|&x| x.abs() < REFIT_ABS), "{f:?}");
    }

    #[test]
    fn matrix_free_fallback_equals_the_dense_path() {
        // Property: with the forms forced matrix-free (the path above 2048 cells), δ_S by
        // conjugate gradients and SS by the Kronecker operators give the dense F*.
        let (shape, cells) = unbalanced_2x3();
        let d = design(&shape, &cells);
        let fit = Fit::new(&d);
        let dense = SsForms::with_strategy(&d.layout, &fit.n, SsType::Three, FormStrategy::Dense).unwrap();
        let free = SsForms::with_strategy(&d.layout, &fit.n, SsType::Three, FormStrategy::MatrixFree).unwrap();
        let settings = Settings::default();
        let a = random_permutation(d.n_obs(), 5);
        for scheme in [PermutationScheme::FreedmanLane, PermutationScheme::TerBraak, PermutationScheme::Manly] {
            let x =
                PermutationTests::new(&Context { design: &d, fit: &fit, forms: &dense, settings: &settings }, scheme)
                    .statistics_for(&a);
            let y =
                PermutationTests::new(&Context { design: &d, fit: &fit, forms: &free, settings: &settings }, scheme)
                    .statistics_for(&a);
            for t in 0..3 {
                assert!(close(y[t], x[t]), "{scheme:?} term {t}: {} vs {}", y[t], x[t]);
            }
        }
    }

    #[test]
    fn exactness_follows_methods_3_2() {
        assert!(scheme_is_exact(PermutationScheme::FreedmanLane, 1));
        assert!(scheme_is_exact(PermutationScheme::Manly, 1));
        assert!(!scheme_is_exact(PermutationScheme::FreedmanLane, 2));
        assert!(!scheme_is_exact(PermutationScheme::Manly, 3));
        assert!(!scheme_is_exact(PermutationScheme::TerBraak, 1));
    }
}
