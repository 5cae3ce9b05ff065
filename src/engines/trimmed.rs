//! The `trimmed` engine: Johansen's Welch–James test on trimmed means for every main
//! effect and interaction of a k-way design (METHODS §4).
//!
//! Each term's hypothesis matrix is the Kronecker product L_S of METHODS §1.1, so the
//! test is the Type III hypothesis of the term on cell trimmed means, with variances
//! free to differ between cells. The building blocks live in [`crate::robust`]; this
//! file only chooses the reference distribution (`--wj-reference`): Johansen's F
//! approximation (default), the adjusted χ² critical value, or a bootstrap critical
//! value from centred cells (METHODS §4.3). The bootstrap draws every term's Q* from
//! the same stratified resamples (stream key term 0, METHODS §10.2), chunk by chunk
//! through [`resample::par_chunks`], and counts exceedances as integers, so its p does
//! not depend on the thread count. With `--trim 0` the test is the untrimmed
//! Welch–James test (Q = q × HC2 Wald F).

use super::{Context, Engine};
use crate::config::{Settings, WjReference};
use crate::design::forms::DENSE_CELL_LIMIT;
use crate::design::Design;
use crate::error::Result;
use crate::model::wald::{WaldForm, WaldScratch};
use crate::resample::{self, mc, mc::McCount, Purpose};
use crate::results::{finite, Decision, Details, Effect, EngineResult, TermResult, TrimmedCellRow, WelchJamesRow};
use crate::robust::{self, ContrastProblem, TrimmedCell, WelchJames};
use serde_json::json;
use std::collections::BTreeMap;

/// The trimmed-means Welch–James engine (id `trimmed`).
pub struct Trimmed;

/// Name of the bootstrap scheme in the `mc` block.
pub const BOOTSTRAP_SCHEME: &str = "stratified-bootstrap-of-centred-cells";

/// Name of the robust standardized effect of a 1-df term (Algina, Keselman & Penfield 2005).
pub const ROBUST_D: &str = "robust_d";

/// At most this many degenerate cells are named in a reason; the rest are counted.
const NAMED_CELLS: usize = 5;

impl Engine for Trimmed {
    fn id(&self) -> &'static str {
        "trimmed"
    }

    fn run(&self, ctx: &Context<'_>) -> Result<EngineResult> {
        let design = ctx.design;
        let settings = ctx.settings;
        let n_cells = design.n_cells();
        let cells: Vec<TrimmedCell> =
            (0..n_cells).map(|c| TrimmedCell::new(design.cell_values(c), settings.trim)).collect();
        let mut result = EngineResult {
            engine: self.id().to_string(),
            settings: settings_map(settings),
            terms: Vec::new(),
            details: None,
            notes: Vec::new(),
        };
        let cell_rows = cell_rows(design, &cells);
        let not_applicable = |reason: &str| -> Vec<TermResult> {
            design.terms().iter().map(|t| TermResult::not_applicable(&t.name, reason)).collect()
        };
        if n_cells > DENSE_CELL_LIMIT {
            result.terms = not_applicable(&format!(
                "the design has {n_cells} cells; the Welch–James forms are dense and limited to {DENSE_CELL_LIMIT} cells"
            ));
            return Ok(result);
        }
        let defects: Vec<String> = cells
            .iter()
            .enumerate()
            .filter_map(|(c, cell)| cell.check().err().map(|d| d.describe(&design.layout.cell_name(c))))
            .collect();
        if !defects.is_empty() {
            result.terms = not_applicable(&join_defects(&defects));
            result.details = Some(Details::Trimmed {
                trim: settings.trim,
                reference: settings.wj_reference.id().into(),
                cells: cell_rows,
                terms: Vec::new(),
            });
            return Ok(result);
        }

        let forms: Vec<WaldForm> = (0..design.terms().len()).map(|t| WaldForm::new(&design.layout, t)).collect();
        let tests: Vec<std::result::Result<WelchJames, ContrastProblem>> =
            forms.iter().map(|f| robust::welch_james(f, &cells)).collect();
        let boot = match settings.wj_reference {
            WjReference::Bootstrap => {
                let observed: Vec<Option<f64>> = tests.iter().map(|t| t.as_ref().ok().map(|w| w.statistic)).collect();
                Some(bootstrap(design, &cells, &forms, &observed, settings))
            }
            _ => None,
        };

        let mut rows = Vec::with_capacity(forms.len());
        for (t, term) in design.terms().iter().enumerate() {
            let wj = match &tests[t] {
                Ok(wj) => wj,
                Err(problem) => {
                    let reason = problem.describe(|c| design.layout.cell_name(c));
                    result.terms.push(TermResult::not_applicable(&term.name, reason));
                    rows.push(empty_row(&term.name));
                    continue;
                }
            };
            let boot_t = boot.as_ref().and_then(|b| b[t]);
            let mut notes = Vec::new();
            let (statistic, df2, p, decision, mc) = match (settings.wj_reference, boot_t) {
                (WjReference::F, _) => {
                    (wj.f, finite(wj.df2), wj.p_f, finite(wj.p_f).map(|p| Decision::from_p(p, settings.alpha)), None)
                }
                (WjReference::Adjusted, _) => (
                    wj.statistic,
                    None,
                    wj.p_adjusted,
                    finite(wj.p_adjusted).map(|p| Decision::from_p(p, settings.alpha)),
                    None,
                ),
                (WjReference::Bootstrap, Some(b)) => {
                    if b.undefined > 0 {
                        notes.push(format!(
                            "{} of {} bootstrap resamples gave a singular covariance (Q* undefined); they were counted as at least as large as the observed Q (conservative)",
                            b.undefined, b.count.resamples
                        ));
                    }
                    (
                        wj.statistic,
                        None,
                        b.count.p(),
                        Some(b.count.decision(settings.alpha)),
                        Some(b.count.to_result(BOOTSTRAP_SCHEME)),
                    )
                }
                (WjReference::Bootstrap, None) => {
                    return Err(crate::error::Error::internal(format!(
                        "trimmed engine: no bootstrap count for term {}",
                        term.name
                    )));
                }
            };
            let mut effects = Vec::new();
            if wj.q == 1 {
                if let Ok(d) = robust::akp_contrast(forms[t].row(0), &cells) {
                    effects.push(Effect::point(ROBUST_D, d));
                }
            }
            rows.push(WelchJamesRow {
                term: term.name.clone(),
                q_stat: finite(wj.statistic),
                a: finite(wj.a),
                c_j: finite(wj.c),
                df1: Some(wj.q as f64),
                df2: finite(wj.df2),
                f: finite(wj.f),
                p_f: finite(wj.p_f),
                p_adjusted: finite(wj.p_adjusted),
                p_bootstrap: boot_t.map(|b| b.count.p()),
                bootstrap_undefined: boot_t.map(|b| b.undefined),
            });
            result.terms.push(TermResult {
                term: term.name.clone(),
                statistic: finite(statistic),
                df1: Some(wj.q as f64),
                df2,
                p: finite(p),
                decision,
                mc,
                effect: effects.first().cloned(),
                effects,
                not_applicable: None,
                notes,
            });
        }
        result.notes = engine_notes(settings, design);
        result.details = Some(Details::Trimmed {
            trim: settings.trim,
            reference: settings.wj_reference.id().into(),
            cells: cell_rows,
            terms: rows,
        });
        Ok(result)
    }
}

fn settings_map(s: &Settings) -> BTreeMap<String, serde_json::Value> {
    let mut m = BTreeMap::new();
    m.insert("ss_type".to_string(), json!(3));
    m.insert("trim".to_string(), json!(s.trim));
    m.insert("reference".to_string(), json!(s.wj_reference.id()));
    m.insert("alpha".to_string(), json!(s.alpha));
    let statistic = match s.wj_reference {
        WjReference::F => "F_WJ = Q/c_J, df (q, nu2)",
        WjReference::Adjusted => "Q against the adjusted chi-square critical value, df q",
        WjReference::Bootstrap => "Q against its bootstrap distribution",
    };
    m.insert("statistic".to_string(), json!(statistic));
    if s.wj_reference == WjReference::Bootstrap {
        m.insert("resamples".to_string(), json!(s.resamples));
        m.insert("max_resamples".to_string(), json!(s.max_permutations.max(s.resamples)));
        m.insert("seed".to_string(), json!(s.seed));
        m.insert("scheme".to_string(), json!(BOOTSTRAP_SCHEME));
    }
    m
}

fn engine_notes(s: &Settings, design: &Design) -> Vec<String> {
    let mut notes = Vec::new();
    if s.trim == 0.0 {
        notes.push("trim 0: untrimmed Welch–James test on cell means (Q = q × HC2 Wald F)".to_string());
    } else {
        notes.push(format!(
            "tests equality of {}% trimmed means (unweighted contrasts of cell trimmed means), variances free",
            fmt_percent(s.trim)
        ));
    }
    match s.wj_reference {
        WjReference::F => {}
        WjReference::Adjusted => notes.push(
            "p from the adjusted chi-square critical value (Johansen 1980); the statistic column is Q".to_string(),
        ),
        WjReference::Bootstrap => notes.push(format!(
            "p = (1 + #{{Q* ≥ Q}})/(B + 1) from stratified resamples of the cells centred at their trimmed means (seed {}); the statistic column is Q",
            s.seed
        )),
    }
    if design.terms().iter().any(|t| t.df == 1) {
        notes.push(format!(
            "{ROBUST_D}: robust standardized difference (Algina, Keselman & Penfield 2005) for 1-df terms, first level minus last, scaled by the pooled winsorized sd; its bootstrap (BCa) interval is not computed yet and is left null"
        ));
    }
    notes
}

fn fmt_percent(gamma: f64) -> String {
    let p = gamma * 100.0;
    if (p - p.round()).abs() < 1e-9 {
        format!("{}", p.round())
    } else {
        format!("{p}")
    }
}

fn join_defects(defects: &[String]) -> String {
    let mut text = defects.iter().take(NAMED_CELLS).cloned().collect::<Vec<_>>().join("; ");
    if defects.len() > NAMED_CELLS {
        text.push_str(&format!("; and {} more cell(s)", defects.len() - NAMED_CELLS));
    }
    text
}

fn cell_rows(design: &Design, cells: &[TrimmedCell]) -> Vec<TrimmedCellRow> {
    let loc = design.location();
    cells
        .iter()
        .enumerate()
        .map(|(c, cell)| TrimmedCellRow {
            levels: design.layout.cell_labels(c),
            n: cell.n,
            g: cell.g,
            h: cell.h,
            trimmed_mean: finite(loc + cell.trimmed_mean),
            winsorized_variance: finite(cell.winsorized_variance),
            se: finite(cell.d.sqrt()),
        })
        .collect()
}

fn empty_row(term: &str) -> WelchJamesRow {
    WelchJamesRow {
        term: term.into(),
        q_stat: None,
        a: None,
        c_j: None,
        df1: None,
        df2: None,
        f: None,
        p_f: None,
        p_adjusted: None,
        p_bootstrap: None,
        bootstrap_undefined: None,
    }
}

/// Monte Carlo count of one term's bootstrap test.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct BootstrapCount {
    /// Resamples and exceedances.
    pub count: McCount,
    /// Resamples with an undefined Q* (counted among the exceedances).
    pub undefined: u64,
}

/// What a bootstrap pass reads: centred data by cell, the forms and the observed Q.
struct BootstrapData<'a> {
    centred: Vec<f64>,
    ranges: Vec<std::ops::Range<usize>>,
    max_n: usize,
    gamma: f64,
    forms: &'a [WaldForm],
    observed: &'a [Option<f64>],
    seed: u64,
}

/// Bootstrap critical values of Johansen's Q (METHODS §4.3; Keselman, Wilcox & Lix 2003):
/// each cell is centred at its trimmed mean, y°_ci = y_ci − X̄_t,c; resample b draws n_c
/// indices per cell with replacement (cells in cell order, `bounded(n_c)`), recomputes
/// trimmed means and d from the resample, and Q*_S with the same L_S. p = (1 + b)/(B + 1)
/// with b = #{Q* ≥ Q(1 − 1e-10)} (a singular Q* counts as an exceedance). Terms whose α
/// lies inside the 99% Clopper–Pearson interval of p get more resamples, up to
/// `--max-permutations` ([`mc::next_resamples`]); all terms share the same resamples.
///
/// Returns one count per term (`None` for terms whose observed Q does not exist).
pub fn bootstrap(
    design: &Design,
    cells: &[TrimmedCell],
    forms: &[WaldForm],
    observed: &[Option<f64>],
    settings: &Settings,
) -> Vec<Option<BootstrapCount>> {
    let ranges: Vec<std::ops::Range<usize>> = (0..design.n_cells()).map(|c| design.cell_range(c)).collect();
    let mut centred = design.y().to_vec();
    for (r, cell) in ranges.iter().zip(cells) {
        for x in &mut centred[r.clone()] {
            *x -= cell.trimmed_mean;
        }
    }
    let data = BootstrapData {
        max_n: ranges.iter().map(|r| r.len()).max().unwrap_or(0),
        centred,
        ranges,
        gamma: settings.trim,
        forms,
        observed,
        seed: settings.seed,
    };
    let active: Vec<usize> = (0..forms.len()).filter(|&t| observed[t].is_some()).collect();
    let b0 = settings.resamples;
    let (exc, und) = count_range(&data, &active, 0, b0);
    let mut counts: Vec<Option<BootstrapCount>> = vec![None; forms.len()];
    for (k, &t) in active.iter().enumerate() {
        counts[t] = Some(BootstrapCount { count: McCount { resamples: b0, exceedances: exc[k] }, undefined: und[k] });
    }
    let max = settings.max_permutations.max(b0);
    let mut current = b0;
    loop {
        let ambiguous: Vec<usize> = active
            .iter()
            .copied()
            .filter(|&t| counts[t].is_some_and(|b| b.count.resamples == current && b.count.ambiguous(settings.alpha)))
            .collect();
        if ambiguous.is_empty() {
            break;
        }
        let Some(next) = mc::next_resamples(current, max) else {
            break;
        };
        let (exc, und) = count_range(&data, &ambiguous, current, next);
        for (k, &t) in ambiguous.iter().enumerate() {
            if let Some(b) = counts[t].as_mut() {
                b.count.resamples = next;
                b.count.exceedances += exc[k];
                b.undefined += und[k];
            }
        }
        current = next;
    }
    counts
}

/// Exceedances and undefined resamples of `terms` over resamples `start..end`.
fn count_range(data: &BootstrapData<'_>, terms: &[usize], start: u64, end: u64) -> (Vec<u64>, Vec<u64>) {
    let per_chunk = resample::par_chunks(start, end, |task| {
        let n_cells = data.ranges.len();
        let mut stream = task.stream(data.seed, Purpose::TrimmedBootstrap, 0, 0);
        let mut buf = vec![0.0; data.max_n];
        let mut mu = vec![0.0; n_cells];
        let mut d = vec![0.0; n_cells];
        let mut scratch: Vec<WaldScratch> = terms.iter().map(|&t| data.forms[t].scratch()).collect();
        let mut exceed = vec![0u64; terms.len()];
        let mut undefined = vec![0u64; terms.len()];
        for b in task.first..task.hi {
            let wanted = b >= task.lo;
            for (c, r) in data.ranges.iter().enumerate() {
                let n = r.len();
                let slot = &mut buf[..n];
                for x in slot.iter_mut() {
                    *x = data.centred[r.start + stream.bounded(n as u64) as usize];
                }
                if wanted {
                    slot.sort_unstable_by(f64::total_cmp);
                    let cell = TrimmedCell::from_sorted(slot, data.gamma);
                    mu[c] = cell.trimmed_mean;
                    d[c] = cell.d;
                }
            }
            if !wanted {
                continue;
            }
            for (k, &t) in terms.iter().enumerate() {
                let observed = data.observed[t].unwrap_or(f64::INFINITY);
                match data.forms[t].statistic(&mu, &d, &mut scratch[k]) {
                    Some(q) if q.is_finite() => {
                        if mc::exceeds(q, observed) {
                            exceed[k] += 1;
                        }
                    }
                    _ => {
                        undefined[k] += 1;
                        exceed[k] += 1;
                    }
                }
            }
        }
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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::design::forms::SsForms;
    use crate::design::Factor;
    use crate::model::Fit;

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

    fn run(design: &Design, settings: &Settings) -> EngineResult {
        let fit = Fit::new(design);
        let forms = SsForms::new(&design.layout, &fit.n, crate::config::SsType::Three).unwrap();
        Trimmed.run(&Context { design, fit: &fit, forms: &forms, settings }).unwrap()
    }

    #[test]
    fn f_form_reports_methods_12_3() {
        // Source: METHODS §12.3 (F_WJ, ν₂, p of the F form).
        let r = run(&methods12(), &Settings::default());
        let want = [(5.441603728, 10.63011380, 0.04043294702), (20.57002623, 6.739359030, 0.001350877889)];
        for (t, (f, df2, p)) in want.iter().enumerate() {
            let term = &r.terms[t];
            assert!((term.statistic.unwrap() / f - 1.0).abs() < 1e-9);
            assert!((term.df2.unwrap() / df2 - 1.0).abs() < 1e-9);
            assert!((term.p.unwrap() / p - 1.0).abs() < 1e-7);
        }
        // d_R of the 1-df term A: METHODS §4.5 formula, finite, interval null.
        let e = r.terms[0].effect.as_ref().unwrap();
        assert_eq!(e.name, ROBUST_D);
        assert!(e.value.is_some() && e.ci_low.is_none());
        assert!(r.terms[1].effect.is_none());
    }

    #[test]
    fn bootstrap_is_identical_on_1_2_and_8_threads() {
        let design = methods12();
        let settings = Settings { wj_reference: WjReference::Bootstrap, resamples: 999, ..Settings::default() };
        let on = |threads: usize| {
            rayon::ThreadPoolBuilder::new().num_threads(threads).build().unwrap().install(|| run(&design, &settings))
        };
        let one = serde_json::to_string(&on(1)).unwrap();
        assert_eq!(one, serde_json::to_string(&on(2)).unwrap());
        assert_eq!(one, serde_json::to_string(&on(8)).unwrap());
    }

    #[test]
    fn degenerate_cells_make_every_term_not_applicable_with_the_cell_named() {
        let cells = vec![vec![1.0, 2.0, 3.0], vec![4.0, 5.0, 7.0], vec![1.0, 4.0, 4.0, 4.0, 9.0], vec![2.0, 3.0, 5.0]];
        let design = Design::from_cells("y", vec![factor("A", 2), factor("B", 2)], &cells).unwrap();
        let r = run(&design, &Settings::default());
        for t in &r.terms {
            let why = t.not_applicable.as_deref().unwrap();
            assert!(why.contains("A=a2, B=b1") && why.contains("zero winsorized variance"), "{why}");
            assert!(t.p.is_none() && t.statistic.is_none());
        }
        let r = run(&design, &Settings { trim: 0.4, ..Settings::default() });
        let why = r.terms[0].not_applicable.as_deref().unwrap();
        assert!(why.contains("A=a1, B=b1") && why.contains("h = 1"), "{why}");
    }
}
