//! The few quantities the concordance's explanations need beyond the engines' own
//! results, computed from the data with library blocks (never by reaching into an
//! engine; DESIGN.md "engines must not reach into another engine").
//!
//! * **Mean contrast** of a 1-df term: ℓ'ȳ over the cell means with ℓ the term's
//!   Type III contrast row (METHODS §1.1: first level minus last, interactions a
//!   difference of differences), rescaled to an average over the other factors'
//!   levels (so a main effect is the difference of the two unweighted marginal means).
//!   It is the estimate of every engine that tests L μ = 0 on means, and gives them a
//!   sign for the direction-conflict check (METHODS §11.1).
//! * **Welch–James on untrimmed means** (`robust::welch_james` with γ = 0; Q = q × the
//!   HC2 Wald F, METHODS §3.6 note) beside the `trimmed` engine's test, so that a
//!   disagreement between the trimmed test and the engines on means can be tied to
//!   trimming itself or not. Computed only when the `trimmed` engine runs with γ > 0.
//!
//! Both use dense contrast matrices, so designs above
//! [`crate::design::forms::DENSE_CELL_LIMIT`] cells get no evidence (the explanations
//! that need it are then left out).

use crate::config::Settings;
use crate::design::forms::DENSE_CELL_LIMIT;
use crate::design::Design;
use crate::model::wald::WaldForm;
use crate::results::{finite, Decision, FTest, TermEvidence};
use crate::robust::{self, TrimmedCell};

/// Evidence for every term of `design`, canonical order.
pub fn compute(design: &Design, settings: &Settings) -> Vec<TermEvidence> {
    let dense = design.n_cells() <= DENSE_CELL_LIMIT;
    let untrimmed: Vec<TrimmedCell> = if dense {
        (0..design.n_cells()).map(|c| TrimmedCell::from_sorted(design.sorted_cell(c), 0.0)).collect()
    } else {
        Vec::new()
    };
    let trims = settings.engines.iter().any(|e| e == "trimmed") && settings.trim > 0.0;
    design
        .terms()
        .iter()
        .enumerate()
        .map(|(t, term)| {
            let mut ev = TermEvidence {
                term: term.name.clone(),
                mean_contrast: None,
                untrimmed_welch_james: None,
                untrimmed_decision: None,
            };
            if !dense {
                return ev;
            }
            let form = WaldForm::new(&design.layout, t);
            if form.q() == 1 {
                let row = form.row(0);
                // Σ|ℓ| = C; each cell of the 2^|S| sub-table is repeated C/2^|S| times.
                let repeats = row.iter().map(|x| x.abs()).sum::<f64>() / (1u64 << term.factors.len()) as f64;
                let psi: f64 = row.iter().zip(&untrimmed).map(|(l, c)| l * c.trimmed_mean).sum();
                ev.mean_contrast = finite(psi / repeats);
            }
            if trims {
                if let Ok(wj) = robust::welch_james(&form, &untrimmed) {
                    if let (Some(f), Some(df2), Some(p)) = (finite(wj.f), finite(wj.df2), finite(wj.p_f)) {
                        ev.untrimmed_welch_james = Some(FTest { f, df1: wj.q as f64, df2, p });
                        ev.untrimmed_decision = Some(Decision::from_p(p, settings.alpha));
                    }
                }
            }
            ev
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::design::Factor;

    fn factor(name: &str, levels: &[&str]) -> Factor {
        Factor { name: name.into(), levels: levels.iter().map(|s| s.to_string()).collect(), measured: false }
    }

    #[test]
    fn mean_contrasts_are_differences_of_unweighted_means() {
        // Invented 2×2×3 cells (property test): cell (a, b, c) has mean 10a + 3b + c with
        // a1b2 shifted by 4, so A's contrast is the marginal difference and A:B is the
        // averaged difference of differences.
        let mut cells = Vec::new();
        for a in 0..2 {
            for b in 0..2 {
                for c in 0..3 {
                    let mean = 10.0 * a as f64 + 3.0 * b as f64 + c as f64 + if a == 0 && b == 1 { 4.0 } else { 0.0 };
                    cells.push(vec![mean - 1.0, mean, mean + 1.0 + 0.1 * c as f64, mean - 0.1 * c as f64]);
                }
            }
        }
        let d = Design::from_cells(
            "y",
            vec![factor("A", &["a1", "a2"]), factor("B", &["b1", "b2"]), factor("C", &["c1", "c2", "c3"])],
            &cells,
        )
        .unwrap();
        let ev = compute(&d, &Settings::default());
        let get = |name: &str| ev.iter().find(|e| e.term == name).unwrap();
        let means: Vec<f64> = (0..12).map(|c| d.cell_values(c).iter().sum::<f64>() / 4.0).collect();
        let marginal = |a: usize| (0..6).map(|k| means[a * 6 + k]).sum::<f64>() / 6.0;
        assert!((get("A").mean_contrast.unwrap() - (marginal(0) - marginal(1))).abs() < 1e-12);
        // (a1b1 − a1b2) − (a2b1 − a2b2), averaged over C.
        let cell = |a: usize, b: usize| (0..3).map(|k| means[a * 6 + b * 3 + k]).sum::<f64>() / 3.0;
        let dd = (cell(0, 0) - cell(0, 1)) - (cell(1, 0) - cell(1, 1));
        assert!((get("A:B").mean_contrast.unwrap() - dd).abs() < 1e-12, "{:?} vs {dd}", get("A:B").mean_contrast);
        assert_eq!(get("C").mean_contrast, None);
        assert_eq!(get("A:C").mean_contrast, None);
        // Untrimmed Welch–James is there for every term (trimmed runs with γ = 0.2 by default).
        assert!(ev.iter().all(|e| e.untrimmed_welch_james.is_some() && e.untrimmed_decision.is_some()));
        // Without the trimmed engine, or with γ = 0, it is not computed.
        let s = Settings { engines: vec!["classical".into()], ..Settings::default() };
        assert!(compute(&d, &s).iter().all(|e| e.untrimmed_welch_james.is_none()));
        let s = Settings { trim: 0.0, ..Settings::default() };
        assert!(compute(&d, &s).iter().all(|e| e.untrimmed_welch_james.is_none()));
    }

    #[test]
    fn untrimmed_welch_james_is_the_trimmed_engine_at_gamma_zero() {
        // Invented unbalanced 2×2 (property test): the evidence equals the trimmed
        // engine run with --trim 0, p for p.
        let d = Design::from_cells(
            "y",
            vec![factor("A", &["a1", "a2"]), factor("B", &["b1", "b2"])],
            &[vec![1.0, 2.0, 4.5, 3.0], vec![2.0, 3.5, 4.0], vec![3.0, 1.0, 2.0, 9.0, 2.5], vec![5.0, 6.0, 4.5]],
        )
        .unwrap();
        let ev = compute(&d, &Settings::default());
        let settings = Settings { trim: 0.0, engines: vec!["trimmed".into()], ..Settings::default() };
        let fit = crate::model::Fit::new(&d);
        let forms = crate::design::forms::SsForms::new(&d.layout, &fit.n, crate::config::SsType::Three).unwrap();
        let ctx = crate::engines::Context { design: &d, fit: &fit, forms: &forms, settings: &settings };
        let engine = crate::engines::run_selected(&ctx).unwrap().remove(0);
        for (e, t) in ev.iter().zip(&engine.terms) {
            assert_eq!(e.untrimmed_welch_james.as_ref().map(|w| w.p), t.p, "{}", e.term);
        }
    }
}
