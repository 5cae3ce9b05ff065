//! Per-term verdicts across engines (DESIGN.md verdict rules, METHODS §11.1).
//!
//! Only engines that decided (`reject`/`retain`) count; `undetermined` and
//! `not_applicable` engines are listed but not counted. The concordance never
//! computes a statistic: it reads the engines' decisions.

use crate::results::{Concordance, Decision, EngineResult, Verdict};

/// The verdict of every term in `terms` (canonical order) across `engines`.
pub fn verdicts(terms: &[String], engines: &[EngineResult]) -> Vec<Concordance> {
    terms
        .iter()
        .map(|term| {
            let mut reject = Vec::new();
            let mut retain = Vec::new();
            let mut undetermined = Vec::new();
            let mut not_applicable = Vec::new();
            for e in engines {
                let Some(r) = e.terms.iter().find(|r| &r.term == term) else {
                    continue;
                };
                match r.decision {
                    Some(Decision::Reject) => reject.push(e.engine.clone()),
                    Some(Decision::Retain) => retain.push(e.engine.clone()),
                    Some(Decision::Undetermined) => undetermined.push(e.engine.clone()),
                    None => not_applicable.push(e.engine.clone()),
                }
            }
            let verdict = match (reject.is_empty(), retain.is_empty()) {
                (true, true) => Verdict::Undetermined,
                (false, true) => Verdict::Holds,
                (true, false) => Verdict::NullHolds,
                (false, false) => Verdict::MethodDependent,
            };
            // Without a primary engine, "agreeing" are the engines on the majority side
            // (rejecting on a tie), "dissenting" the others.
            let (agreeing, dissenting) = if reject.len() >= retain.len() { (reject, retain) } else { (retain, reject) };
            Concordance {
                term: term.clone(),
                verdict,
                agreeing,
                dissenting,
                undetermined,
                not_applicable,
                primary: None,
                reason: None,
            }
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::results::TermResult;
    use std::collections::BTreeMap;

    fn engine(id: &str, decision: Option<Decision>) -> EngineResult {
        let mut t = TermResult::not_applicable("A", "n/a");
        if decision.is_some() {
            t.not_applicable = None;
        }
        t.decision = decision;
        EngineResult { engine: id.into(), settings: BTreeMap::new(), terms: vec![t], details: None, notes: vec![] }
    }

    fn verdict(list: &[(&str, Option<Decision>)]) -> Concordance {
        let engines: Vec<EngineResult> = list.iter().map(|(id, d)| engine(id, *d)).collect();
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
        // Undetermined and not-applicable engines are listed, not counted.
        let c = verdict(&[("a", Some(Reject)), ("b", Some(Undetermined)), ("c", None)]);
        assert_eq!(c.verdict, Verdict::Holds);
        assert_eq!(c.undetermined, vec!["b"]);
        assert_eq!(c.not_applicable, vec!["c"]);
        assert_eq!(verdict(&[("b", Some(Undetermined)), ("c", None)]).verdict, Verdict::Undetermined);
        assert_eq!(verdict(&[]).verdict, Verdict::Undetermined);
    }
}
