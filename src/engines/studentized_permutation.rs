//! Studentized (Wald-type) permutation tests of every term (METHODS §3.6; Pauly,
//! Brunner & Konietschke 2015, JRSS-B 77:461–473), engine id `studentized-permutation`.
//!
//! The statistic is W_S = (L_S μ̂)'(L_S V̂ L_S')⁻¹(L_S μ̂) with V̂ = diag(s²_c/n_c), which
//! standardises each cell mean by its own variance; its permutation distribution over
//! the raw data, permuted across all cells, stays asymptotically valid with unequal
//! variances and unequal n, and is exact when all N responses are exchangeable. W is
//! evaluated by [`WaldForm`] (the one Wald implementation, checked against
//! statsmodels' HC2 Wald test: W = q·F_HC2).
//!
//! Why this shape: the engine draws the same permutations as the `permutation` engine
//! (shared stream, term code 0) through [`crate::resample::permute`]; per resample it
//! sums contiguous cell ranges of the permuted, grand-mean-centred outcome for the cell
//! sums and sums of squares (O(N)), turns them into means and variances, and evaluates
//! each term's W with per-chunk work space (O(q²C + q³)). A permuted cell whose values
//! are all equal has no variance, W* is undefined: that resample counts as an
//! exceedance (conservative) and the number of such resamples is reported.

use super::{all_not_applicable, Context, Engine};
use crate::config::TailApproximation;
use crate::dist;
use crate::error::Result;
use crate::model::wald::{WaldForm, WaldScratch};
use crate::resample::permute::{self, ArrangedStatistic, Plan};
use crate::resample::progress::{Progress, Visibility};
use crate::resample::tail;
use crate::results::{finite, Details, EngineResult, NullDistribution, TermResult};
use serde_json::json;
use std::collections::BTreeMap;

/// The studentized permutation engine (id `studentized-permutation`).
pub struct StudentizedPermutation;

/// Scheme id in `mc.scheme`: raw data permuted across all cells.
pub const SCHEME: &str = "raw-data";

/// Engine code in the auxiliary streams of the tail fits.
const TAIL_STREAM_AUX: u64 = 2;

/// Largest q²·C for which a term's dense Wald form is evaluated per resample (about a
/// millisecond of work per resample and term on current hardware).
pub const WALD_WORK_LIMIT: usize = 1 << 22;

/// A permuted cell's within-cell sum of squares counts as zero below this fraction of
/// its sum of squares about the grand mean (rounding in Σy² − (Σy)²/n for equal values).
pub const ZERO_VARIANCE_REL: f64 = 1e-12;

impl Engine for StudentizedPermutation {
    fn id(&self) -> &'static str {
        "studentized-permutation"
    }

    fn run(&self, ctx: &Context<'_>) -> Result<EngineResult> {
        let settings = ctx.settings;
        let design = ctx.design;
        let mut settings_out = BTreeMap::new();
        settings_out.insert("ss_type".to_string(), json!(3));
        settings_out.insert("statistic".to_string(), json!("W (Wald-type, V = diag(s²_c/n_c))"));
        settings_out.insert("scheme".to_string(), json!(SCHEME));
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
            notes: vec![
                "raw outcome permuted across all cells; W standardises each cell mean by its own variance, so the test stays asymptotically valid with unequal variances and unequal n (Pauly, Brunner & Konietschke 2015); exact only when all responses are exchangeable".into(),
                "no effect size of its own: the classical engine's partial η² describes the same contrasts".into(),
            ],
        };
        if settings.permutations == 0 {
            result.terms =
                all_not_applicable(ctx.design, "no permutations requested (B = 0; give --permutations 1 or more)");
            return Ok(result);
        }
        if let Some(reason) = cell_problem(ctx) {
            result.terms = all_not_applicable(design, &reason);
            return Ok(result);
        }
        let tests = WaldTests::new(ctx);
        let observed: Vec<Option<f64>> = tests.observed.clone();
        let progress = Progress::new(self.id(), settings.permutations, Visibility::from_quiet(settings.quiet));
        let plan = Plan {
            resamples: settings.permutations,
            max_resamples: settings.max_permutations,
            alpha: settings.alpha,
            seed: settings.seed,
        };
        let outcomes = permute::test_terms(&tests, &tests.values, &tests.sizes, &observed, &plan, &progress);
        progress.finish();
        let mut nulls = Vec::new();
        for (t, term) in design.terms().iter().enumerate() {
            let (Some(w), Some(outcome)) = (observed[t], &outcomes[t]) else {
                let reason = if term.df * term.df * design.n_cells() > WALD_WORK_LIMIT {
                    format!(
                        "the term's Wald form (q = {}, {} cells) is too large to evaluate per permutation",
                        term.df,
                        design.n_cells()
                    )
                } else {
                    "the Wald-type statistic is undefined (L V L' is singular)".to_string()
                };
                result.terms.push(TermResult::not_applicable(&term.name, reason));
                continue;
            };
            let q = term.df as f64;
            let asymptotic = dist::chi2_sf(w, q);
            let tail = tail::for_outcome(
                settings.tail_approximation,
                outcome,
                w,
                settings.seed,
                t as u64 + 1,
                TAIL_STREAM_AUX,
            );
            let mut notes = outcome.notes(settings.alpha, settings.max_permutations);
            notes.extend(tail.as_ref().and_then(tail::note));
            result.terms.push(TermResult {
                term: term.name.clone(),
                statistic: finite(w),
                df1: Some(q),
                df2: None,
                p: finite(outcome.p()),
                decision: Some(outcome.decision(settings.alpha)),
                mc: Some(outcome.monte_carlo(SCHEME, Some(false))),
                effect: None,
                effects: Vec::new(),
                not_applicable: None,
                notes,
            });
            nulls.push(NullDistribution {
                term: term.name.clone(),
                statistic: "W".into(),
                observed: finite(w),
                resamples: outcome.statistics.len() as u64,
                exact: outcome.exact,
                quantiles: outcome.quantiles(),
                degenerate: outcome.degenerate,
                asymptotic_p: finite(asymptotic),
                tail,
            });
        }
        result.details = Some(Details::Permutation { terms: nulls });
        Ok(result)
    }
}

/// Why no term can be tested: a cell with fewer than two observations or without
/// variance (W needs s²_c > 0 in every cell; METHODS §3.6).
fn cell_problem(ctx: &Context<'_>) -> Option<String> {
    let fit = ctx.fit;
    let layout = &ctx.design.layout;
    if let Some(c) = fit.n.iter().position(|&n| n < 2) {
        return Some(format!(
            "cell ({}) has one observation: the Wald-type statistic needs a variance in every cell",
            layout.cell_name(c)
        ));
    }
    if let Some(c) = fit.ss_within.iter().position(|&s| s <= 0.0) {
        return Some(format!(
            "cell ({}) has no variance (all values equal): the Wald-type statistic needs a variance in every cell",
            layout.cell_name(c)
        ));
    }
    None
}

/// Everything the studentized tests of one design need.
pub struct WaldTests {
    forms: Vec<Option<WaldForm>>,
    /// Observed W of every term (`None` where the form is too large or singular).
    pub observed: Vec<Option<f64>>,
    sizes: Vec<usize>,
    n: Vec<f64>,
    starts: Vec<usize>,
    /// Outcome centred at the grand mean, canonical order.
    values: Vec<f64>,
}

impl WaldTests {
    /// Prepares the tests of `ctx`'s design (every cell must have n ≥ 2 and variance).
    pub fn new(ctx: &Context<'_>) -> WaldTests {
        let (design, fit) = (ctx.design, ctx.fit);
        let sizes = design.cell_sizes();
        let n: Vec<f64> = sizes.iter().map(|&v| v as f64).collect();
        let mut starts = vec![0];
        starts.extend((0..sizes.len()).map(|c| design.cell_range(c).end));
        let values: Vec<f64> = design.y().iter().map(|y| y - fit.grand_mean).collect();
        let c = design.n_cells();
        let forms: Vec<Option<WaldForm>> = (0..design.terms().len())
            .map(|t| {
                let q = design.terms()[t].df;
                (q * q * c <= WALD_WORK_LIMIT).then(|| WaldForm::new(&design.layout, t))
            })
            .collect();
        // Observed W from the two-pass cell means and variances.
        let v: Vec<f64> = fit.ss_within.iter().zip(&n).map(|(s, m)| s / (m - 1.0) / m).collect();
        let observed = forms
            .iter()
            .map(|f| f.as_ref().and_then(|f| f.statistic(&fit.mean, &v, &mut f.scratch())).and_then(finite))
            .collect();
        WaldTests { forms, observed, sizes, n, starts, values }
    }

    /// W of every term for the centred outcome rearranged by the permutation `a` of
    /// canonical indices (tests and benches); NaN where undefined.
    pub fn statistics_for(&self, a: &[usize]) -> Vec<f64> {
        let active: Vec<usize> = (0..self.forms.len()).filter(|&t| self.forms[t].is_some()).collect();
        let records: Vec<f64> = a.iter().map(|&i| self.values[i]).collect();
        let mut out = vec![f64::NAN; active.len()];
        self.evaluate(&records, &active, &mut self.scratch(), &mut out);
        let mut all = vec![f64::NAN; self.forms.len()];
        for (j, &t) in active.iter().enumerate() {
            all[t] = out[j];
        }
        all
    }
}

/// Per-chunk work space of the studentized statistics.
pub struct Scratch {
    mean: Vec<f64>,
    var: Vec<f64>,
    wald: Vec<Option<WaldScratch>>,
}

impl ArrangedStatistic<f64> for WaldTests {
    type Scratch = Scratch;

    fn scratch(&self) -> Scratch {
        let c = self.n.len();
        Scratch {
            mean: vec![0.0; c],
            var: vec![0.0; c],
            wald: self.forms.iter().map(|f| f.as_ref().map(WaldForm::scratch)).collect(),
        }
    }

    fn evaluate(&self, arranged: &[f64], active: &[usize], s: &mut Scratch, out: &mut [f64]) {
        let mut degenerate = false;
        for c in 0..self.n.len() {
            let cell = &arranged[self.starts[c]..self.starts[c + 1]];
            let (mut sum, mut sum_sq) = (0.0, 0.0);
            for &y in cell {
                sum += y;
                sum_sq += y * y;
            }
            let n = self.n[c];
            let mean = sum / n;
            let within = sum_sq - sum * mean;
            if within <= ZERO_VARIANCE_REL * sum_sq {
                degenerate = true;
            }
            s.mean[c] = mean;
            s.var[c] = within / (n - 1.0) / n;
        }
        for (j, &t) in active.iter().enumerate() {
            out[j] = match (degenerate, &self.forms[t], s.wald[t].as_mut()) {
                (false, Some(form), Some(scratch)) => form.statistic(&s.mean, &s.var, scratch).unwrap_or(f64::NAN),
                _ => f64::NAN,
            };
        }
    }
}

#[cfg(test)]
#[allow(clippy::needless_range_loop)]
mod tests {
    use super::*;
    use crate::config::{Settings, SsType};
    use crate::design::forms::SsForms;
    use crate::design::{Design, Factor};
    use crate::model::Fit;
    use crate::resample::{Purpose, Stream, StreamKey};
    use proptest::prelude::*;

    /// Agreement of the one-pass permuted W with W from two-pass cell statistics.
    const PASS_REL: f64 = 1e-9;
    /// METHODS §12.4 prints W with 10 significant digits.
    const PRINTED_REL: f64 = 1e-9;
    /// The identity rearrangement reproduces the observed W up to one-pass rounding.
    const IDENTITY_REL: f64 = 1e-10;

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

    fn with_tests<T>(d: &Design, f: impl FnOnce(&Context<'_>, WaldTests) -> T) -> T {
        let fit = Fit::new(d);
        let forms = SsForms::new(&d.layout, &fit.n, SsType::Three).unwrap();
        let settings = Settings::default();
        let ctx = Context { design: d, fit: &fit, forms: &forms, settings: &settings };
        let tests = WaldTests::new(&ctx);
        f(&ctx, tests)
    }

    /// W from two-pass means and variances of the rearranged values, by WaldForm.
    fn two_pass_w(d: &Design, values: &[f64], t: usize) -> Option<f64> {
        let mut mu = Vec::new();
        let mut v = Vec::new();
        for c in 0..d.n_cells() {
            let cell = &values[d.cell_range(c)];
            mu.push(crate::model::mean_two_pass(cell));
            v.push(crate::summary::variance(cell) / cell.len() as f64);
        }
        let form = WaldForm::new(&d.layout, t);
        form.statistic(&mu, &v, &mut form.scratch())
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(64))]
        #[test]
        fn permuted_w_equals_two_pass_cell_statistics(
            shape in prop::sample::select(vec![vec![3], vec![2, 2], vec![2, 3]]),
            sizes in prop::collection::vec(2usize..7, 6),
            raw in prop::collection::vec(-30.0f64..30.0, 42),
            seed in any::<u64>(),
        ) {
            // Property: W* from one-pass cell sums and sums of squares of the permuted,
            // centred outcome equals W from two-pass statistics of the permuted data.
            let c: usize = shape.iter().product();
            let mut it = raw.iter().copied();
            let cells: Vec<Vec<f64>> = sizes[..c].iter().map(|&n| (0..n).map(|_| it.next().unwrap()).collect()).collect();
            let d = design(&shape, &cells);
            with_tests(&d, |_, tests| {
                let mut s = Stream::new(seed, StreamKey { purpose: Purpose::Auxiliary, term: 5, chunk: 0, aux: 0 });
                let mut a: Vec<usize> = (0..d.n_obs()).collect();
                s.shuffle(&mut a);
                let w = tests.statistics_for(&a);
                let permuted: Vec<f64> = a.iter().map(|&i| d.y()[i]).collect();
                for (t, &fast) in w.iter().enumerate() {
                    let slow = two_pass_w(&d, &permuted, t).unwrap();
                    prop_assert!((fast - slow).abs() <= PASS_REL * slow.abs() + 1e-12, "term {t}: {fast} vs {slow}");
                }
                Ok(())
            })?;
        }
    }

    #[test]
    fn observed_w_matches_statsmodels_hc2() {
        // Source: METHODS §12.4 (statsmodels HC2 Wald F × q on the §12.0 data):
        // W = 8.674885271 (A), 50.85924868 (B), 3.618261838 (A×B).
        let cells = vec![
            vec![9.6, 10.2, 9.9, 10.0, 9.2],
            vec![9.1, 9.8, 11.3, 9.7, 9.8, 12.1, 10.7],
            vec![11.9, 12.0, 13.5, 15.0, 13.2, 16.2],
            vec![13.8, 9.6, 9.4, 9.9, 9.2, 10.1, 9.8, 9.9],
            vec![10.9, 11.6, 14.8, 14.9, 10.3, 12.6],
            vec![13.4, 14.9, 18.5, 19.2, 12.1, 14.9, 17.6],
        ];
        let d = design(&[2, 3], &cells);
        with_tests(&d, |_, tests| {
            for (t, want) in [8.674885271, 50.85924868, 3.618261838].into_iter().enumerate() {
                let w = tests.observed[t].unwrap();
                assert!((w / want - 1.0).abs() < PRINTED_REL, "{w} vs {want}");
            }
            let id: Vec<usize> = (0..d.n_obs()).collect();
            let w = tests.statistics_for(&id);
            for t in 0..3 {
                assert!((w[t] / tests.observed[t].unwrap() - 1.0).abs() < IDENTITY_REL);
            }
        });
    }

    #[test]
    fn permuted_cells_without_variance_are_degenerate() {
        // Two equal values moved into one cell of two: W* is undefined (NaN), which the
        // shared machinery counts as an exceedance.
        let d = design(&[2], &[vec![1.0, 5.0], vec![5.0, 2.0]]);
        with_tests(&d, |_, tests| {
            let w = tests.statistics_for(&[1, 2, 0, 3]);
            assert!(w[0].is_nan());
        });
    }

    #[test]
    fn cells_that_cannot_have_a_variance_make_the_engine_not_applicable() {
        for cells in [vec![vec![1.0], vec![2.0, 3.0]], vec![vec![1.0, 1.0], vec![2.0, 3.0]]] {
            let d = design(&[2], &cells);
            let fit = Fit::new(&d);
            let forms = SsForms::new(&d.layout, &fit.n, SsType::Three).unwrap();
            let settings = Settings { quiet: true, ..Settings::default() };
            let ctx = Context { design: &d, fit: &fit, forms: &forms, settings: &settings };
            let r = StudentizedPermutation.run(&ctx).unwrap();
            let why = r.terms[0].not_applicable.as_deref().unwrap();
            assert!(why.contains("A=l0"), "{why}");
            assert!(r.terms[0].p.is_none());
        }
    }
}
