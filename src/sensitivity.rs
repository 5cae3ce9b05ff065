//! The sensitivity variant of `analyze`: every selected engine rerun without the points
//! a drop rule flags (DESIGN.md "Outlier rules and the sensitivity variant"; METHODS
//! Overrides 9 and §11.3).
//!
//! The variant is a second, data-processing axis of the multiverse: the same engines
//! on the same data less the flagged rows. It works on a new [`Design`] built from the
//! kept rows (cell structure kept, everything else recomputed) and never touches the
//! input. Because the rows were chosen after looking at the data, its p-values are
//! descriptive, and the results say so. Degenerate variants never stop the analysis:
//! a design-level problem (an emptied cell, no residual df, a constant outcome) makes
//! every engine `not_applicable` with the reason, and a cell shrunk below an engine's
//! minimum is that engine's own `not_applicable`.

use crate::concordance;
use crate::config::{Settings, SsType};
use crate::design::forms::SsForms;
use crate::design::Design;
use crate::diagnostics::Removal;
use crate::engines::{self, Context};
use crate::error::{Error, Result};
use crate::model::Fit;
use crate::results::{Concordance, EngineResult, Sensitivity};
use std::collections::BTreeMap;

/// The note every variant carries.
pub const DESCRIPTIVE_NOTE: &str = "descriptive: the removed points were chosen after looking at the data, so these p-values are not valid tests; compare the verdicts with the main analysis rather than reading the p-values as evidence";

/// The variant id of a rule's variant.
fn variant_id(removal: &Removal) -> &'static str {
    match removal.rule {
        crate::config::DropRule::Far => "without-far-out-points",
        crate::config::DropRule::Mad => "without-mad-median-points",
        crate::config::DropRule::None => "none",
    }
}

/// Runs the variant of `removal` on `design`. `main` and `main_concordance` are the main
/// analysis's results, reused unchanged when the rule removes nothing.
///
/// # Errors
/// Only a failed internal consistency check of an engine (exit 4).
pub fn variant(
    design: &Design,
    settings: &Settings,
    removal: &Removal,
    main: &[EngineResult],
    main_concordance: &[Concordance],
) -> Result<Sensitivity> {
    let mut rows_removed: Vec<u64> = removal.rows.iter().filter_map(|&i| design.lines().get(i).copied()).collect();
    rows_removed.sort_unstable();
    let mut notes = vec![DESCRIPTIVE_NOTE.to_string(), "the input file is not changed".to_string()];
    if let Some(rate) = removal.null_rate {
        notes.push(format!(
            "under normal, equal-variance data with these cell sizes this rule removes at least one point from {:.1}% of datasets (simulation)",
            rate * 100.0
        ));
    }
    let terms: Vec<String> = design.terms().iter().map(|t| t.name.clone()).collect();
    let (engines_out, concordance_out) = if removal.rows.is_empty() {
        notes.push("no point met the rule: the variant is the main analysis".to_string());
        (main.to_vec(), main_concordance.to_vec())
    } else {
        let reduced = design.without_observations(&removal.rows).and_then(|d| d.check_testable().map(|_| d));
        let results = match reduced {
            Ok(d) => {
                let fit = Fit::new(&d);
                let forms = SsForms::new(&d.layout, &fit.n, SsType::Three)?;
                let ctx = Context { design: &d, fit: &fit, forms: &forms, settings };
                engines::run_selected(&ctx)?
            }
            Err(Error::Impossible { reason }) => {
                let why = format!("not applicable in this variant: {reason}");
                notes.push(why.clone());
                settings.engines.iter().map(|id| not_applicable_engine(id, design, &why)).collect()
            }
            Err(other) => return Err(other),
        };
        let mut results = results;
        for e in &mut results {
            e.notes.push(format!("sensitivity variant ({} rows removed): {DESCRIPTIVE_NOTE}", removal.rows.len()));
        }
        let conc = concordance::verdicts(&terms, &results);
        (results, conc)
    };
    Ok(Sensitivity {
        variant: variant_id(removal).to_string(),
        rule: removal.rule.id().to_string(),
        rows_removed,
        engines: engines_out,
        concordance: concordance_out,
        description: removal.description.clone(),
        null_removal_rate: removal.null_rate.and_then(crate::results::finite),
        notes,
    })
}

/// An engine that cannot run at all in the variant: every term not applicable.
fn not_applicable_engine(id: &str, design: &Design, reason: &str) -> EngineResult {
    let mut settings = BTreeMap::new();
    settings.insert("ss_type".to_string(), serde_json::json!(3));
    EngineResult {
        engine: id.to_string(),
        settings,
        terms: engines::all_not_applicable(design, reason),
        details: None,
        notes: Vec::new(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::config::DropRule;
    use crate::design::Factor;

    fn factor(name: &str, levels: &[&str]) -> Factor {
        Factor { name: name.into(), levels: levels.iter().map(|s| s.to_string()).collect(), measured: false }
    }

    fn removal(rows: Vec<usize>) -> Removal {
        Removal { rule: DropRule::Far, rows, description: "test".into(), null_rate: Some(0.1) }
    }

    #[test]
    fn a_variant_that_empties_a_cell_is_not_applicable_not_an_error() {
        // Invented data (property test): removing both rows of cell a1b1 empties it.
        let d = Design::from_cells(
            "y",
            vec![factor("A", &["a1", "a2"]), factor("B", &["b1", "b2"])],
            &[vec![1.0, 2.0], vec![2.0, 3.5, 4.0], vec![3.0, 1.0, 2.0], vec![5.0, 6.0, 4.5]],
        )
        .unwrap();
        let settings = Settings::default();
        let s = variant(&d, &settings, &removal(vec![0, 1]), &[], &[]).unwrap();
        assert_eq!(s.rows_removed, vec![2, 3]);
        assert!(!s.engines.is_empty());
        for e in &s.engines {
            assert_eq!(e.terms.len(), 3);
            for t in &e.terms {
                let why = t.not_applicable.as_deref().unwrap();
                assert!(why.contains("A=a1, B=b1"), "{why}");
            }
        }
        assert!(s.notes.iter().any(|n| n.starts_with("descriptive")));
    }

    #[test]
    fn removing_rows_reruns_the_engines_on_the_kept_rows() {
        let d = Design::from_cells(
            "y",
            vec![factor("A", &["a1", "a2"]), factor("B", &["b1", "b2"])],
            &[vec![1.0, 2.0, 1.5, 40.0], vec![2.0, 3.5, 4.0], vec![3.0, 1.0, 2.0], vec![5.0, 6.0, 4.5]],
        )
        .unwrap();
        let settings = Settings { engines: vec!["classical".into()], ..Settings::default() };
        let s = variant(&d, &settings, &removal(vec![3]), &[], &[]).unwrap();
        assert_eq!(s.rows_removed, vec![5]);
        let reduced = Design::from_cells(
            "y",
            vec![factor("A", &["a1", "a2"]), factor("B", &["b1", "b2"])],
            &[vec![1.0, 2.0, 1.5], vec![2.0, 3.5, 4.0], vec![3.0, 1.0, 2.0], vec![5.0, 6.0, 4.5]],
        )
        .unwrap();
        let fit = Fit::new(&reduced);
        let forms = SsForms::new(&reduced.layout, &fit.n, SsType::Three).unwrap();
        let direct =
            engines::run_selected(&Context { design: &reduced, fit: &fit, forms: &forms, settings: &settings })
                .unwrap();
        for (a, b) in s.engines[0].terms.iter().zip(&direct[0].terms) {
            assert_eq!(a.statistic, b.statistic);
            assert_eq!(a.p, b.p);
        }
        assert_eq!(s.concordance.len(), 3);
    }
}
