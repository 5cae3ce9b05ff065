//! Explanations of disagreements, from what quorum computed and nothing else.
//!
//! Each rule below looks at numbers quorum has (the engines' decisions and their
//! hypothesis families, Welch–James on untrimmed means beside the trimmed test, the
//! far-out variant, the calibrated flags, the Monte Carlo intervals) and, when its
//! pattern is there, says so in one sentence. The sentences state associations ("goes
//! with", "is not tied to") and never a cause the tool cannot check: quorum cannot know
//! why an outlier is there or which estimand the study should target.
//!
//! Rules, in the order printed:
//! 1. direction conflict of a 1-df term (always shown when present);
//! 2. rank-based engines unanimous against the engines on means, or else a clean split
//!    by hypothesis family;
//! 3. trimmed vs untrimmed Welch–James (the effect of trimming alone);
//! 4. engines on means that allow unequal variances vs those that pool them, when a
//!    variance flag fired;
//! 5. the far-out variant: which decisions change without the far-out lines;
//! 6. engines that could not decide (Monte Carlo interval contains α);
//! 7. a borderline primary p.

use super::profile;
use crate::report::apa;
use crate::results::{Concordance, Decision, EngineCall, EngineResult, Flag, HypothesisFamily, PrimaryChoice, Verdict};

/// The far-out variant as the explanations read it.
#[derive(Debug, Clone, Copy)]
pub struct Variant<'a> {
    /// Input lines the variant removed.
    pub lines: &'a [u64],
    /// The variant's concordance rows.
    pub rows: &'a [Concordance],
}

/// What the explanations read besides the row itself.
#[derive(Debug, Clone, Copy)]
pub struct Inputs<'a> {
    /// Significance level.
    pub alpha: f64,
    /// The primary engine.
    pub primary: Option<&'a PrimaryChoice>,
    /// Diagnostics flags (codes only).
    pub flags: &'a [Flag],
    /// Largest/smallest cell variance.
    pub variance_ratio: Option<f64>,
    /// The engines' results (for Monte Carlo intervals and settings).
    pub engines: &'a [EngineResult],
    /// The far-out variant, for the main analysis's rows (None for the variant's own rows).
    pub variant: Option<Variant<'a>>,
}

fn verb(d: Decision) -> &'static str {
    match d {
        Decision::Reject => "reject",
        Decision::Retain => "retain",
        Decision::Undetermined => "are undetermined",
    }
}

fn verb_one(d: Decision) -> &'static str {
    match d {
        Decision::Reject => "rejects",
        Decision::Retain => "retains",
        Decision::Undetermined => "is undetermined",
    }
}

fn list(v: &[String]) -> String {
    match v {
        [] => String::new(),
        [one] => one.clone(),
        _ => {
            let (last, rest) = v.split_last().unwrap_or((&v[0], &[]));
            format!("{} and {last}", rest.join(", "))
        }
    }
}

fn decided(c: &EngineCall) -> Option<Decision> {
    c.decision.filter(|d| matches!(d, Decision::Reject | Decision::Retain))
}

/// The one decision every call in `calls` made, if they all decided the same way.
fn unanimous(calls: &[&EngineCall]) -> Option<Decision> {
    let first = calls.first().and_then(|c| decided(c))?;
    calls.iter().all(|c| decided(c) == Some(first)).then_some(first)
}

fn ids(calls: &[&EngineCall]) -> Vec<String> {
    calls.iter().map(|c| c.engine.clone()).collect()
}

fn estimate_words(c: &EngineCall) -> String {
    match &c.estimate {
        Some(e) => {
            let v = e.value.map(apa::value).unwrap_or_default();
            format!("{} {} {v}", c.engine, e.name.replace('_', " "))
        }
        None => c.engine.clone(),
    }
}

/// Explanations for one row.
pub fn explain(row: &Concordance, inputs: &Inputs<'_>) -> Vec<String> {
    let mut out = Vec::new();
    let split = row.verdict == Verdict::MethodDependent;
    // 1. Direction conflict.
    if row.direction_conflict {
        let pos: Vec<String> =
            row.engines.iter().filter(|c| c.sign.is_some_and(|s| s > 0)).map(estimate_words).collect();
        let neg: Vec<String> =
            row.engines.iter().filter(|c| c.sign.is_some_and(|s| s < 0)).map(estimate_words).collect();
        out.push(format!(
            "Direction conflict: the estimates point in opposite directions ({} positive; {} negative); the engines' estimands differ on these data, so read the cell table before stating a direction",
            pos.join(", "),
            neg.join(", ")
        ));
    }
    let deciding: Vec<&EngineCall> = row.engines.iter().filter(|c| decided(c).is_some()).collect();
    if split {
        // 2. Families.
        let in_family = |fams: &[HypothesisFamily]| -> Vec<&EngineCall> {
            deciding.iter().copied().filter(|c| fams.contains(&c.family)).collect()
        };
        let ranks = in_family(&[HypothesisFamily::AlignedRanks, HypothesisFamily::RelativeEffects]);
        let means = in_family(&[HypothesisFamily::Means]);
        let rank_side = unanimous(&ranks);
        let mean_side = unanimous(&means);
        match (rank_side, mean_side) {
            (Some(r), Some(m)) if r != m => {
                let agree = if ranks.len() > 1 { " agree with each other" } else { "" };
                out.push(format!(
                    "The rank-based engines ({}){agree} and {} but the engines on means ({}) {}: on these data the conclusion from ranks differs from the conclusion from means",
                    list(&ids(&ranks)),
                    verb(r),
                    list(&ids(&means)),
                    verb(m)
                ));
            }
            _ => {
                let fams = [
                    HypothesisFamily::Means,
                    HypothesisFamily::TrimmedMeans,
                    HypothesisFamily::AlignedRanks,
                    HypothesisFamily::RelativeEffects,
                ];
                let groups: Vec<(HypothesisFamily, Vec<&EngineCall>)> =
                    fams.iter().map(|f| (*f, in_family(&[*f]))).filter(|(_, v)| !v.is_empty()).collect();
                let clean = groups.len() > 1 && groups.iter().all(|(_, v)| unanimous(v).is_some());
                if clean {
                    let parts: Vec<String> = groups
                        .iter()
                        .map(|(f, v)| {
                            let d = unanimous(v).unwrap_or(Decision::Undetermined);
                            format!("on {} ({}) they {}", profile::family_words(*f), list(&ids(v)), verb(d))
                        })
                        .collect();
                    out.push(format!("The split follows the hypotheses tested: {}", parts.join("; ")));
                }
            }
        }
        // 3. Trimmed vs untrimmed Welch–James.
        let trimmed = row.engines.iter().find(|c| c.engine == "trimmed");
        let trim = inputs.engines.iter().find(|e| e.engine == "trimmed").and_then(|e| profile::trim(&e.settings));
        if let (Some(t), Some(trim), Some(ev)) = (trimmed, trim, row.evidence.as_ref()) {
            if let (Some(dt), Some(d0), Some(wj0), Some(pt)) =
                (decided(t), ev.untrimmed_decision, ev.untrimmed_welch_james.as_ref(), t.p)
            {
                if trim > 0.0 && d0 != dt {
                    out.push(format!(
                        "Welch–James on untrimmed means {} ({}) while on {} trimmed means it {} ({}): the difference goes with the values that trimming sets aside in the tails of the cells",
                        verb_one(d0),
                        apa::p_phrase(wj0.p, inputs.alpha),
                        profile::percent(trim),
                        verb_one(dt),
                        apa::p_phrase(pt, inputs.alpha)
                    ));
                } else if trim > 0.0 {
                    let others: Vec<&EngineCall> = means.iter().copied().filter(|c| decided(c) != Some(dt)).collect();
                    if !others.is_empty() {
                        out.push(format!(
                            "Welch–James on untrimmed means also {} ({}), as the trimmed test does: the split between the trimmed test and {} is not tied to trimming",
                            verb_one(d0),
                            apa::p_phrase(wj0.p, inputs.alpha),
                            list(&ids(&others))
                        ));
                    }
                }
            }
        }
        // 4. Unequal variances.
        let variance_flag =
            inputs.flags.iter().any(|f| f.code == "unequal-variances" || f.code == "unequal-variances-unequal-n");
        if variance_flag {
            let pooled: Vec<&EngineCall> =
                deciding.iter().copied().filter(|c| matches!(c.engine.as_str(), "classical" | "permutation")).collect();
            let free: Vec<&EngineCall> = deciding
                .iter()
                .copied()
                .filter(|c| matches!(c.engine.as_str(), "hc" | "studentized-permutation" | "bootstrap"))
                .collect();
            if let (Some(dp), Some(df)) = (unanimous(&pooled), unanimous(&free)) {
                if dp != df {
                    let ratio = inputs
                        .variance_ratio
                        .map(|r| format!(" (largest/smallest cell variance {})", apa::value(r)))
                        .unwrap_or_default();
                    out.push(format!(
                        "The tests on means that allow unequal variances ({}) {} where those that pool the variances ({}) {}; the cell variances differ more than normal data with these cell sizes give{ratio}",
                        list(&ids(&free)),
                        verb(df),
                        list(&ids(&pooled)),
                        verb(dp)
                    ));
                }
            }
        }
    }
    // 5. The far-out variant.
    if let Some(v) = inputs.variant {
        if let Some(vr) = v.rows.iter().find(|r| r.term == row.term) {
            if !v.lines.is_empty() && (split || vr.verdict != row.verdict) {
                out.push(variant_sentence(row, vr, v.lines, inputs));
            }
        }
    }
    // 6. Undetermined engines.
    for c in row.engines.iter().filter(|c| c.decision == Some(Decision::Undetermined)) {
        let mc = inputs
            .engines
            .iter()
            .find(|e| e.engine == c.engine)
            .and_then(|e| e.terms.iter().find(|t| t.term == row.term))
            .and_then(|t| t.mc.as_ref());
        let interval = match mc {
            Some(m) => format!(
                " [{}, {}] after {} resamples",
                apa::p_value(m.ci_low, inputs.alpha),
                apa::p_value(m.ci_high, inputs.alpha),
                profile::count(m.resamples)
            ),
            None => String::new(),
        };
        out.push(format!(
            "{} could not decide: α lies inside the 99% Monte Carlo interval of its p{interval}; a larger --max-permutations may settle it",
            c.engine
        ));
    }
    // 7. Borderline primary p.
    if row.borderline {
        let primary_p =
            row.primary.as_ref().and_then(|id| row.engines.iter().find(|c| &c.engine == id)).and_then(|c| c.p);
        if let Some(p) = primary_p {
            out.push(format!(
                "Borderline: the primary engine's {} lies within a factor √10 of α = {}; a small change in the data or the method can move it across α",
                apa::p_phrase(p, inputs.alpha),
                apa::alpha(inputs.alpha),
            ));
        }
    }
    out
}

fn variant_sentence(row: &Concordance, vr: &Concordance, lines: &[u64], inputs: &Inputs<'_>) -> String {
    let where_ =
        format!("Without the far-out points ({}; descriptive)", crate::diagnostics::flags::lines_phrase(lines));
    let mut changes: Vec<String> = Vec::new();
    for c in &row.engines {
        let after = vr.engines.iter().find(|x| x.engine == c.engine).and_then(decided);
        if let (Some(b), Some(a)) = (decided(c), after) {
            if a != b {
                changes.push(format!("{} {} → {}", c.engine, verb(b), verb(a)));
            }
        }
    }
    let verdicts = if vr.verdict != row.verdict {
        format!("; the verdict becomes {}", Verdict::words(vr.verdict))
    } else {
        String::new()
    };
    if changes.is_empty() {
        return format!(
            "{where_} no engine's decision changes{verdicts}: the disagreement is not tied to those points"
        );
    }
    // Does every deciding engine now agree with the primary engine's main decision?
    let primary = inputs.primary.and_then(|p| p.engine.as_ref());
    let primary_main = primary.and_then(|id| row.engines.iter().find(|c| &c.engine == id)).and_then(decided);
    let joined = match (primary, primary_main) {
        (Some(id), Some(d))
            if vr.engines.iter().filter_map(decided).all(|x| x == d)
                && vr.engines.iter().any(|c| decided(c).is_some()) =>
        {
            format!(": then every engine that decides agrees with the primary engine ({id}), so the disagreement goes with those points")
        }
        _ => String::new(),
    };
    format!("{where_}: {}{verdicts}{joined}", changes.join(", "))
}

/// Fills `explanations` of every row.
pub fn annotate(rows: &mut [Concordance], inputs: &Inputs<'_>) {
    for r in rows.iter_mut() {
        r.explanations = explain(r, inputs);
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::resample::mc::McCount;
    use crate::results::{AgreementBasis, Effect, FTest, TermEvidence, TermResult};
    use std::collections::BTreeMap;

    fn call(id: &str, d: Option<Decision>, p: f64) -> EngineCall {
        EngineCall {
            engine: id.into(),
            family: profile::profile(id).family,
            p: Some(p),
            decision: d,
            sign: None,
            estimate: None,
        }
    }

    fn row(calls: Vec<EngineCall>) -> Concordance {
        let rej: Vec<String> =
            calls.iter().filter(|c| c.decision == Some(Decision::Reject)).map(|c| c.engine.clone()).collect();
        let ret: Vec<String> =
            calls.iter().filter(|c| c.decision == Some(Decision::Retain)).map(|c| c.engine.clone()).collect();
        let verdict = match (rej.is_empty(), ret.is_empty()) {
            (false, false) => Verdict::MethodDependent,
            (false, true) => Verdict::Holds,
            (true, false) => Verdict::NullHolds,
            _ => Verdict::Undetermined,
        };
        Concordance {
            term: "A".into(),
            verdict,
            agreeing: vec![],
            dissenting: vec![],
            undetermined: vec![],
            not_applicable: vec![],
            primary: Some("trimmed".into()),
            reason: None,
            basis: AgreementBasis::Primary,
            rejecting: rej,
            retaining: ret,
            engines: calls,
            borderline: false,
            direction_conflict: false,
            p_min: None,
            p_max: None,
            log10_p_spread: None,
            evidence: None,
            explanations: vec![],
        }
    }

    fn trimmed_engine(trim: f64) -> EngineResult {
        let mut s = BTreeMap::new();
        s.insert("trim".to_string(), serde_json::json!(trim));
        EngineResult { engine: "trimmed".into(), settings: s, terms: vec![], details: None, notes: vec![] }
    }

    fn inputs<'a>(engines: &'a [EngineResult], flags: &'a [Flag]) -> Inputs<'a> {
        Inputs { alpha: 0.05, primary: None, flags, variance_ratio: Some(13.4), engines, variant: None }
    }

    use Decision::{Reject as R, Retain as K};

    #[test]
    fn ranks_against_means() {
        let r = row(vec![
            call("classical", Some(R), 0.01),
            call("hc", Some(R), 0.02),
            call("art", Some(K), 0.3),
            call("rank-ats", Some(K), 0.4),
        ]);
        let ex = explain(&r, &inputs(&[], &[]));
        assert_eq!(ex.len(), 1, "{ex:?}");
        assert!(ex[0].starts_with("The rank-based engines (art and rank-ats) agree with each other and retain but the engines on means (classical and hc) reject"), "{}", ex[0]);
        // The rank engines disagree with each other: no rank sentence, the family split instead.
        let r = row(vec![call("classical", Some(R), 0.01), call("art", Some(K), 0.3), call("rank-ats", Some(R), 0.04)]);
        let ex = explain(&r, &inputs(&[], &[]));
        assert_eq!(ex.len(), 1, "{ex:?}");
        assert!(ex[0].starts_with("The split follows the hypotheses tested: on means (classical) they reject; on aligned ranks (art) they retain"), "{}", ex[0]);
        // Not unanimous within a family: no family sentence.
        let r = row(vec![call("classical", Some(R), 0.01), call("hc", Some(K), 0.3), call("art", Some(R), 0.04)]);
        assert!(explain(&r, &inputs(&[], &[])).is_empty());
        // Holds: nothing to explain.
        let r = row(vec![call("classical", Some(R), 0.01), call("art", Some(R), 0.03)]);
        assert!(explain(&r, &inputs(&[], &[])).is_empty());
    }

    #[test]
    fn family_split_and_trimming() {
        let mut r = row(vec![
            call("classical", Some(R), 0.015),
            call("hc", Some(R), 0.021),
            call("trimmed", Some(K), 0.0509),
            call("art", Some(R), 0.014),
        ]);
        let engines = [trimmed_engine(0.2)];
        // Untrimmed WJ rejects where the trimmed one retains.
        r.evidence = Some(TermEvidence {
            term: "A".into(),
            mean_contrast: None,
            untrimmed_welch_james: Some(FTest { f: 4.0, df1: 2.0, df2: 20.0, p: 0.021 }),
            untrimmed_decision: Some(R),
        });
        let ex = explain(&r, &inputs(&engines, &[]));
        assert!(ex.iter().any(|s| s.starts_with("The split follows the hypotheses tested: on means (classical and hc) they reject; on trimmed means (trimmed) they retain; on aligned ranks (art) they reject")), "{ex:?}");
        assert!(
            ex.iter().any(|s| s.contains(
                "Welch–James on untrimmed means rejects (p = .021) while on 20% trimmed means it retains (p = .051)"
            )),
            "{ex:?}"
        );
        // Untrimmed WJ agrees with the trimmed test.
        r.evidence = Some(TermEvidence {
            term: "A".into(),
            mean_contrast: None,
            untrimmed_welch_james: Some(FTest { f: 2.0, df1: 2.0, df2: 20.0, p: 0.08 }),
            untrimmed_decision: Some(K),
        });
        let ex = explain(&r, &inputs(&engines, &[]));
        assert!(ex.iter().any(|s| s.contains("also retains (p = .080), as the trimmed test does: the split between the trimmed test and classical and hc is not tied to trimming")), "{ex:?}");
        // Without trimming (γ = 0) there is no trimming sentence.
        let engines = [trimmed_engine(0.0)];
        assert!(!explain(&r, &inputs(&engines, &[])).iter().any(|s| s.contains("Welch–James")));
    }

    #[test]
    fn variances_only_with_the_flag() {
        let r = row(vec![call("classical", Some(R), 0.01), call("hc", Some(K), 0.2)]);
        assert!(explain(&r, &inputs(&[], &[])).is_empty());
        let flags = [Flag { code: "unequal-variances".into(), message: String::new() }];
        let ex = explain(&r, &inputs(&[], &flags));
        assert_eq!(ex.len(), 1, "{ex:?}");
        assert!(ex[0].starts_with("The tests on means that allow unequal variances (hc) retain where those that pool the variances (classical) reject"), "{}", ex[0]);
        assert!(ex[0].contains("13.40"));
    }

    #[test]
    fn far_out_variant() {
        let main =
            row(vec![call("classical", Some(R), 0.01), call("hc", Some(R), 0.03), call("trimmed", Some(K), 0.2)]);
        let after =
            row(vec![call("classical", Some(K), 0.2), call("hc", Some(K), 0.3), call("trimmed", Some(K), 0.25)]);
        let p = PrimaryChoice {
            engine: Some("trimmed".into()),
            settings: BTreeMap::new(),
            fixed: false,
            rule: None,
            rule_number: None,
            reason: String::new(),
            citations: vec![],
            flags: vec![],
            skipped: vec![],
            rules_would_choose: None,
            notes: vec![],
        };
        let rows = [after];
        let mut inp = inputs(&[], &[]);
        inp.primary = Some(&p);
        inp.variant = Some(Variant { lines: &[7, 33], rows: &rows });
        let ex = explain(&main, &inp);
        let s = ex.iter().find(|s| s.starts_with("Without the far-out points")).expect("variant sentence");
        assert_eq!(
            s,
            "Without the far-out points (lines 7 and 33; descriptive): classical reject → retain, hc reject → retain; the verdict becomes null holds: then every engine that decides agrees with the primary engine (trimmed), so the disagreement goes with those points"
        );
        // No change.
        let rows = [main.clone()];
        inp.variant = Some(Variant { lines: &[7], rows: &rows });
        let ex = explain(&main, &inp);
        assert!(ex.iter().any(|s| s == "Without the far-out points (line 7; descriptive) no engine's decision changes: the disagreement is not tied to those points"), "{ex:?}");
        // Nothing removed: no sentence.
        inp.variant = Some(Variant { lines: &[], rows: &rows });
        assert!(!explain(&main, &inp).iter().any(|s| s.starts_with("Without")));
        // A verdict that changes is explained even when the main verdict is not split.
        let holds = row(vec![call("classical", Some(R), 0.01), call("hc", Some(R), 0.03)]);
        let split = row(vec![call("classical", Some(R), 0.03), call("hc", Some(K), 0.07)]);
        let rows = [split];
        inp.variant = Some(Variant { lines: &[5], rows: &rows });
        let ex = explain(&holds, &inp);
        assert!(ex.iter().any(|s| s.contains("hc reject → retain; the verdict becomes method-dependent")), "{ex:?}");
    }

    #[test]
    fn direction_undetermined_and_borderline() {
        let mut a = call("classical", Some(R), 0.01);
        a.sign = Some(1);
        a.estimate = Some(Effect::point("mean_contrast", 0.64));
        let mut b = call("trimmed", Some(K), 0.049);
        b.sign = Some(-1);
        b.estimate = Some(Effect::point("robust_d", -0.17));
        let c = call("permutation", Some(Decision::Undetermined), 0.05);
        let mut r = row(vec![a, b, c]);
        r.direction_conflict = true;
        r.borderline = true;
        let mut perm = EngineResult {
            engine: "permutation".into(),
            settings: BTreeMap::new(),
            terms: vec![TermResult::not_applicable("A", "x")],
            details: None,
            notes: vec![],
        };
        // Through the library's constructor (robust to fields added to `MonteCarlo`).
        perm.terms[0].mc = Some(McCount { resamples: 99_999, exceedances: 4999 }.to_result("freedman-lane"));
        let engines = [perm];
        let ex = explain(&r, &inputs(&engines, &[]));
        assert!(ex[0].starts_with("Direction conflict: the estimates point in opposite directions (classical mean contrast 0.64 positive; trimmed robust d -0.17 negative)"), "{}", ex[0]);
        assert!(ex.iter().any(|s| s.starts_with("permutation could not decide: α lies inside the 99% Monte Carlo interval of its p [.048, .052] after 99,999 resamples")), "{ex:?}");
        assert!(ex.iter().any(|s| s.starts_with("Borderline: the primary engine's p = .049 lies within a factor √10 of α = .05")), "{ex:?}");
    }
}
