//! Per-term verdicts across engines (DESIGN.md verdict rules, METHODS §11).
//!
//! The concordance reads the engines' decisions and never computes a statistic. For
//! each term it records every engine's call, the verdict over the engines that decided
//! (`undetermined` and `not_applicable` engines are listed but not counted), which
//! engines agree with the primary engine, the borderline marker, the direction
//! conflict of 1-df terms, the spread of the p-values, and plain-language explanations
//! of disagreements from what quorum measured ([`explain`]). The primary engine is
//! chosen in [`primary`], before any p-value is read. The same function serves the
//! main analysis and the far-out variant (`sensitivity[].concordance`), which keeps the
//! main analysis's primary engine: it was pre-specified, the variant is not.
//!
//! **Agreement** (`agreeing`/`dissenting`, with `basis` saying against what):
//! * the primary engine decided (reject or retain) → agreeing = the deciding engines
//!   with its decision (itself included), dissenting = those with the other one;
//! * the primary engine is undetermined or not applicable on this term, or there is
//!   none → the majority decision of the deciding engines;
//! * no primary decision and an even split → both lists empty (`even-split`); the
//!   `rejecting` and `retaining` lists always hold the plain facts;
//! * no engine decided → both lists empty (`no-decision`).

pub mod explain;
pub mod primary;
pub mod profile;

use crate::results::{
    finite, AgreementBasis, Concordance, Decision, EngineCall, EngineResult, PrimaryChoice, TermEvidence, TermResult,
    Verdict,
};
use profile::SignedEstimate;

/// What the comparison reads besides the engines.
#[derive(Debug, Clone, Copy)]
pub struct Inputs<'a> {
    /// The primary engine, when chosen.
    pub primary: Option<&'a PrimaryChoice>,
    /// Evidence per term (any order; matched by term id).
    pub evidence: &'a [TermEvidence],
    /// Significance level (for the borderline marker).
    pub alpha: f64,
}

/// Half an order of magnitude: the primary p is borderline when |log10(p/α)| is below
/// this (p within a factor √10 of α; METHODS §11.1).
pub const BORDERLINE_LOG10: f64 = 0.5;

/// The verdict of every term without a primary engine or evidence (agreement against
/// the majority). Used where no primary is known yet.
pub fn verdicts(terms: &[String], engines: &[EngineResult]) -> Vec<Concordance> {
    compare(terms, engines, &Inputs { primary: None, evidence: &[], alpha: 0.05 })
}

/// The concordance of every term in `terms` (canonical order) across `engines`.
pub fn compare(terms: &[String], engines: &[EngineResult], inputs: &Inputs<'_>) -> Vec<Concordance> {
    terms.iter().map(|term| row(term, engines, inputs)).collect()
}

fn sign(x: f64) -> i8 {
    if x > 0.0 {
        1
    } else if x < 0.0 {
        -1
    } else {
        0
    }
}

/// One engine's call on a term, with its signed estimate for 1-df terms.
fn call(e: &EngineResult, r: Option<&TermResult>, evidence: Option<&TermEvidence>) -> EngineCall {
    let p = profile::profile(&e.engine);
    let applicable = r.is_some_and(|r| r.not_applicable.is_none());
    let one_df = r.and_then(|r| r.df1).is_some_and(|d| (d - 1.0).abs() < 1e-9);
    let estimate = match (applicable && one_df, p.signed) {
        (true, SignedEstimate::MeanContrast) => {
            evidence.and_then(|ev| ev.mean_contrast).map(|v| crate::results::Effect::point("mean_contrast", v))
        }
        (true, SignedEstimate::Effect(name)) => {
            r.and_then(|r| r.effects.iter().find(|x| x.name == name)).filter(|x| x.value.is_some()).cloned()
        }
        _ => None,
    };
    EngineCall {
        engine: e.engine.clone(),
        family: p.family,
        p: r.and_then(|r| r.p),
        decision: r.and_then(|r| if r.not_applicable.is_some() { None } else { r.decision }),
        sign: estimate.as_ref().and_then(|x| x.value).map(sign),
        estimate,
    }
}

fn row(term: &str, engines: &[EngineResult], inputs: &Inputs<'_>) -> Concordance {
    let evidence = inputs.evidence.iter().find(|ev| ev.term == term);
    let calls: Vec<EngineCall> =
        engines.iter().map(|e| call(e, e.terms.iter().find(|r| r.term == term), evidence)).collect();
    let mut rejecting = Vec::new();
    let mut retaining = Vec::new();
    let mut undetermined = Vec::new();
    let mut not_applicable = Vec::new();
    for c in &calls {
        match c.decision {
            Some(Decision::Reject) => rejecting.push(c.engine.clone()),
            Some(Decision::Retain) => retaining.push(c.engine.clone()),
            Some(Decision::Undetermined) => undetermined.push(c.engine.clone()),
            None => not_applicable.push(c.engine.clone()),
        }
    }
    let verdict = match (rejecting.is_empty(), retaining.is_empty()) {
        (true, true) => Verdict::Undetermined,
        (false, true) => Verdict::Holds,
        (true, false) => Verdict::NullHolds,
        (false, false) => Verdict::MethodDependent,
    };
    let primary_id = inputs.primary.and_then(|p| p.engine.clone());
    let primary_call = primary_id.as_ref().and_then(|id| calls.iter().find(|c| &c.engine == id));
    let primary_decision =
        primary_call.and_then(|c| c.decision).filter(|d| matches!(d, Decision::Reject | Decision::Retain));
    let (basis, reference) = match primary_decision {
        Some(d) => (AgreementBasis::Primary, Some(d)),
        None if rejecting.is_empty() && retaining.is_empty() => (AgreementBasis::NoDecision, None),
        None if rejecting.len() > retaining.len() => (AgreementBasis::Majority, Some(Decision::Reject)),
        None if rejecting.len() < retaining.len() => (AgreementBasis::Majority, Some(Decision::Retain)),
        None => (AgreementBasis::EvenSplit, None),
    };
    let (agreeing, dissenting) = match reference {
        Some(Decision::Reject) => (rejecting.clone(), retaining.clone()),
        Some(Decision::Retain) => (retaining.clone(), rejecting.clone()),
        _ => (Vec::new(), Vec::new()),
    };
    let borderline = primary_call
        .and_then(|c| c.p)
        .filter(|&p| p > 0.0 && inputs.alpha > 0.0)
        .is_some_and(|p| (p / inputs.alpha).log10().abs() < BORDERLINE_LOG10);
    let signs: Vec<i8> = calls.iter().filter_map(|c| c.sign).filter(|&s| s != 0).collect();
    let direction_conflict = signs.iter().any(|&s| s > 0) && signs.iter().any(|&s| s < 0);
    let ps: Vec<f64> = calls.iter().filter_map(|c| c.p).filter(|p| p.is_finite()).collect();
    let p_min = ps.iter().copied().reduce(f64::min);
    let p_max = ps.iter().copied().reduce(f64::max);
    let log10_p_spread = match (p_min, p_max) {
        (Some(lo), Some(hi)) if lo > 0.0 => finite((hi / lo).log10()),
        _ => None,
    };
    Concordance {
        term: term.to_string(),
        verdict,
        agreeing,
        dissenting,
        undetermined,
        not_applicable,
        primary: primary_id,
        reason: inputs.primary.map(reason),
        basis,
        rejecting,
        retaining,
        engines: calls,
        borderline,
        direction_conflict,
        p_min,
        p_max,
        log10_p_spread,
        evidence: evidence.cloned(),
        explanations: Vec::new(),
    }
}

/// The contract's `reason` string: the choice and its citations.
pub fn reason(p: &PrimaryChoice) -> String {
    if p.citations.is_empty() {
        p.reason.clone()
    } else {
        format!("{} ({})", p.reason, p.citations.join("; "))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::results::{Effect, HypothesisFamily};
    use std::collections::BTreeMap;

    fn engine(id: &str, decision: Option<Decision>, p: Option<f64>) -> EngineResult {
        let mut t = TermResult::not_applicable("A", "n/a");
        if decision.is_some() {
            t.not_applicable = None;
            t.df1 = Some(1.0);
        }
        t.decision = decision;
        t.p = p;
        EngineResult { engine: id.into(), settings: BTreeMap::new(), terms: vec![t], details: None, notes: vec![] }
    }

    fn primary(id: Option<&str>) -> PrimaryChoice {
        PrimaryChoice {
            engine: id.map(str::to_string),
            settings: BTreeMap::new(),
            fixed: false,
            rule: None,
            rule_number: None,
            reason: "test".into(),
            citations: vec!["Author (2000)".into()],
            flags: vec![],
            skipped: vec![],
            rules_would_choose: None,
            notes: vec![],
        }
    }

    fn with(list: &[(&str, Option<Decision>)], primary_id: Option<&str>) -> Concordance {
        let engines: Vec<EngineResult> = list
            .iter()
            .map(|(id, d)| engine(id, *d, d.map(|d| if d == Decision::Reject { 0.01 } else { 0.5 })))
            .collect();
        let p = primary(primary_id);
        compare(&["A".to_string()], &engines, &Inputs { primary: Some(&p), evidence: &[], alpha: 0.05 }).remove(0)
    }

    fn verdict(list: &[(&str, Option<Decision>)]) -> Concordance {
        let engines: Vec<EngineResult> = list.iter().map(|(id, d)| engine(id, *d, None)).collect();
        verdicts(&["A".to_string()], &engines).remove(0)
    }

    #[test]
    fn every_verdict_branch() {
        use Decision::*;
        assert_eq!(verdict(&[("a", Some(Reject)), ("b", Some(Reject))]).verdict, Verdict::Holds);
        assert_eq!(verdict(&[("a", Some(Retain)), ("b", Some(Retain))]).verdict, Verdict::NullHolds);
        let c = verdict(&[("a", Some(Reject)), ("b", Some(Retain)), ("c", Some(Retain))]);
        assert_eq!(c.verdict, Verdict::MethodDependent);
        assert_eq!(c.agreeing, vec!["b", "c"]);
        assert_eq!(c.dissenting, vec!["a"]);
        assert_eq!(c.basis, AgreementBasis::Majority);
        // Undetermined and not-applicable engines are listed, not counted.
        let c = verdict(&[("a", Some(Reject)), ("b", Some(Undetermined)), ("c", None)]);
        assert_eq!(c.verdict, Verdict::Holds);
        assert_eq!(c.undetermined, vec!["b"]);
        assert_eq!(c.not_applicable, vec!["c"]);
        // All undetermined or not applicable: no decision.
        let c = verdict(&[("b", Some(Undetermined)), ("c", None)]);
        assert_eq!(c.verdict, Verdict::Undetermined);
        assert_eq!(c.basis, AgreementBasis::NoDecision);
        assert!(c.agreeing.is_empty() && c.dissenting.is_empty());
        let c = verdict(&[("c", None), ("d", None)]);
        assert_eq!((c.verdict, c.not_applicable.len()), (Verdict::Undetermined, 2));
        assert_eq!(verdict(&[]).verdict, Verdict::Undetermined);
    }

    #[test]
    fn agreement_is_read_against_the_primary_engine() {
        use Decision::*;
        // The primary decided: agreeing are the engines with its decision, even in a minority.
        let c = with(&[("a", Some(Reject)), ("b", Some(Reject)), ("t", Some(Retain))], Some("t"));
        assert_eq!(c.basis, AgreementBasis::Primary);
        assert_eq!((c.agreeing.clone(), c.dissenting.clone()), (vec!["t".to_string()], vec!["a".into(), "b".into()]));
        assert_eq!(c.primary.as_deref(), Some("t"));
        assert_eq!(c.reason.as_deref(), Some("test (Author (2000))"));
        // The primary is undetermined on the term: the majority decides.
        let c = with(
            &[("a", Some(Reject)), ("b", Some(Reject)), ("c", Some(Retain)), ("t", Some(Undetermined))],
            Some("t"),
        );
        assert_eq!(c.basis, AgreementBasis::Majority);
        assert_eq!(c.agreeing, vec!["a", "b"]);
        assert_eq!(c.dissenting, vec!["c"]);
        // The primary is not applicable: the majority decides.
        let c = with(&[("a", Some(Retain)), ("b", Some(Retain)), ("c", Some(Reject)), ("t", None)], Some("t"));
        assert_eq!((c.basis, c.agreeing.len(), c.dissenting.len()), (AgreementBasis::Majority, 2, 1));
        // The primary did not run at all (fixed but absent): the majority decides.
        let c = with(&[("a", Some(Retain)), ("b", Some(Retain))], Some("absent"));
        assert_eq!((c.basis, c.agreeing.len()), (AgreementBasis::Majority, 2));
        // No primary decision and an even split: nothing to agree with.
        let c = with(&[("a", Some(Reject)), ("b", Some(Retain)), ("t", Some(Undetermined))], Some("t"));
        assert_eq!(c.basis, AgreementBasis::EvenSplit);
        assert!(c.agreeing.is_empty() && c.dissenting.is_empty());
        assert_eq!((c.rejecting.clone(), c.retaining.clone()), (vec!["a".to_string()], vec!["b".to_string()]));
        // Every engine undetermined or not applicable, the primary among them.
        let c = with(&[("a", Some(Undetermined)), ("t", None)], Some("t"));
        assert_eq!((c.basis, c.verdict), (AgreementBasis::NoDecision, Verdict::Undetermined));
        // No primary engine at all.
        let c = with(&[("a", Some(Reject)), ("b", Some(Retain)), ("c", Some(Retain))], None);
        assert_eq!((c.basis, c.agreeing.len()), (AgreementBasis::Majority, 2));
        assert_eq!(c.primary, None);
    }

    #[test]
    fn borderline_spread_and_direction() {
        let p = primary(Some("t"));
        let mut e =
            vec![engine("t", Some(Decision::Retain), Some(0.0509)), engine("c", Some(Decision::Reject), Some(0.0153))];
        let run = |e: &[EngineResult], ev: &[TermEvidence]| {
            compare(&["A".to_string()], e, &Inputs { primary: Some(&p), evidence: ev, alpha: 0.05 }).remove(0)
        };
        let c = run(&e, &[]);
        assert!(c.borderline);
        assert_eq!((c.p_min, c.p_max), (Some(0.0153), Some(0.0509)));
        assert!((c.log10_p_spread.unwrap() - (0.0509f64 / 0.0153).log10()).abs() < 1e-12);
        // p = α·√10 is not borderline; just inside is.
        e[0].terms[0].p = Some(0.05 * 10f64.sqrt() * 1.0001);
        assert!(!run(&e, &[]).borderline);
        e[0].terms[0].p = Some(0.05 / 10f64.sqrt() * 1.0001);
        assert!(run(&e, &[]).borderline);
        // A p of zero gives no spread (log of 0), never a NaN.
        e[0].terms[0].p = Some(0.0);
        let c = run(&e, &[]);
        assert_eq!((c.log10_p_spread, c.borderline), (None, false));
        // Direction: the means family reads the mean contrast, trimmed its robust d,
        // rank-ats its relative effect difference; ART has no signed estimate.
        let mut tr = engine("trimmed", Some(Decision::Retain), Some(0.2));
        tr.terms[0].effects.push(Effect::point("robust_d", 0.4));
        let mut ats = engine("rank-ats", Some(Decision::Retain), Some(0.3));
        ats.terms[0].effects.push(Effect::point("relative_effect_difference", 0.1));
        let cl = engine("classical", Some(Decision::Reject), Some(0.01));
        let art = engine("art", Some(Decision::Retain), Some(0.4));
        let ev = |v: f64| TermEvidence {
            term: "A".into(),
            mean_contrast: Some(v),
            untrimmed_welch_james: None,
            untrimmed_decision: None,
        };
        let all = vec![tr, ats, cl, art];
        let c = run(&all, &[ev(-2.0)]);
        assert!(c.direction_conflict);
        let signs: Vec<Option<i8>> = c.engines.iter().map(|x| x.sign).collect();
        assert_eq!(signs, vec![Some(1), Some(1), Some(-1), None]);
        assert_eq!(c.engines[0].family, HypothesisFamily::TrimmedMeans);
        assert_eq!(c.engines[2].estimate.as_ref().unwrap().name, "mean_contrast");
        assert!(!run(&all, &[ev(3.0)]).direction_conflict);
        // An exact zero estimate has no direction.
        assert!(!run(&all, &[ev(0.0)]).direction_conflict);
        // Terms with more than 1 df have no sign.
        let mut wide = all.clone();
        for e in &mut wide {
            e.terms[0].df1 = Some(2.0);
        }
        let c = run(&wide, &[ev(-2.0)]);
        assert!(!c.direction_conflict && c.engines.iter().all(|x| x.sign.is_none()));
    }
}
