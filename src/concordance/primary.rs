//! The primary engine: which engine's result to report first, chosen before looking at
//! any p-value of any engine (METHODS §11.2, Overrides 8).
//!
//! The choice reads the calibrated diagnostics flags only, never the p-value of an
//! assumption test: choosing a test by a preliminary significance test distorts the
//! error rates of the whole procedure (Zimmerman 2004; Rasch, Kubinger & Moder 2011).
//! The flags map to the rules as DEVELOPERS.md says: rule 1 ↔ `discrete-outcome`,
//! rule 2 ↔ `outliers`, `far-out` or `heavy-tails`, rule 3 ↔
//! `unequal-variances-unequal-n`, rule 4 ↔ `skewed-residuals` in small cells, rule 5 ↔ any
//! non-normality flag without a variance flag in small cells, rule 6 otherwise.
//! The rules are tried in order and the first whose engine ran (with the settings the
//! rule names: Overrides 8 makes "WJ with γ = 0" and "bootstrap critical value" settings
//! of `trimmed`) wins; a rule that applies but whose engine did not run is recorded as
//! skipped, with the reason, and the next applicable rule is tried. A user may fix the
//! engine in advance (`--primary`, preregistration); the rules' choice is then shown
//! for information only and never substituted, even when the fixed engine could not run.

use super::profile;
use crate::results::{EngineResult, Flag, PrimaryChoice, PrimaryRule, SkippedRule};
use serde_json::Value;
use std::collections::BTreeMap;

/// Cells with fewer observations than this are "small" for rules 3–5 (a toolkit
/// convention, not a derived result: METHODS §11.2 says "small cells" without a number;
/// at n = 10 a 20%-trimmed cell keeps 6 values).
pub const SMALL_CELL_N: usize = 10;

/// What the choice reads.
#[derive(Debug, Clone, Copy)]
pub struct Inputs<'a> {
    /// The diagnostics flags (only their codes are read).
    pub flags: &'a [Flag],
    /// Cell sizes.
    pub cell_sizes: &'a [usize],
    /// The engines that ran, with their settings.
    pub engines: &'a [EngineResult],
    /// An engine id fixed in advance by the user.
    pub fixed: Option<&'a str>,
}

/// A setting an engine must have run with to serve a rule.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Requirement {
    /// Any settings.
    Any,
    /// `trimmed` with γ > 0.
    Trimming,
    /// `trimmed` with γ = 0 (Welch–James on means).
    NoTrimming,
    /// `trimmed` with γ > 0 and the bootstrap critical value.
    TrimmingWithBootstrap,
    /// `hc` with HC3 or HC4 (the types METHODS §11.2 names).
    Hc3OrHc4,
    /// `permutation` with the Freedman–Lane scheme.
    FreedmanLane,
}

impl Requirement {
    fn check(self, settings: &BTreeMap<String, Value>) -> Result<(), String> {
        let trim = profile::trim(settings).unwrap_or(0.0);
        let text = |k: &str| settings.get(k).and_then(Value::as_str).unwrap_or("").to_string();
        match self {
            Requirement::Any => Ok(()),
            Requirement::Trimming if trim > 0.0 => Ok(()),
            Requirement::Trimming => Err("it ran without trimming (--trim 0)".into()),
            Requirement::NoTrimming if trim == 0.0 => Ok(()),
            Requirement::NoTrimming => {
                Err(format!("it ran with {} trimming, not as Welch–James on means (γ = 0)", profile::percent(trim)))
            }
            Requirement::TrimmingWithBootstrap if trim > 0.0 && text("reference") == "bootstrap" => Ok(()),
            Requirement::TrimmingWithBootstrap => {
                Err("it ran without the bootstrap critical value (--wj-reference bootstrap) or without trimming".into())
            }
            Requirement::Hc3OrHc4 if matches!(text("hc").as_str(), "HC3" | "HC4") => Ok(()),
            Requirement::Hc3OrHc4 => Err(format!("it ran with {}, where the rule names HC3 or HC4", text("hc"))),
            Requirement::FreedmanLane if text("scheme") == "freedman-lane" => Ok(()),
            Requirement::FreedmanLane => Err(format!("it ran with the {} scheme, not Freedman–Lane", text("scheme"))),
        }
    }
}

/// One applicable rule: its candidates in order of preference, reason and literature.
struct Applicable {
    rule: PrimaryRule,
    candidates: Vec<(&'static str, Requirement)>,
    reason: String,
    citations: Vec<&'static str>,
    flags: Vec<String>,
    notes: Vec<String>,
}

/// METHODS §11.2's number of a rule.
pub fn rule_number(rule: PrimaryRule) -> u8 {
    match rule {
        PrimaryRule::OrdinalOrTied => 1,
        PrimaryRule::HeavyTailsOrOutliers => 2,
        PrimaryRule::UnequalVariancesUnequalN => 3,
        PrimaryRule::SkewSmallCells => 4,
        PrimaryRule::NonNormalSmallN => 5,
        PrimaryRule::NoneOfTheAbove => 6,
    }
}

/// The rule in a few words.
pub fn rule_words(rule: PrimaryRule) -> &'static str {
    match rule {
        PrimaryRule::OrdinalOrTied => "ordinal or heavily tied outcome",
        PrimaryRule::HeavyTailsOrOutliers => "heavy tails or outlying points",
        PrimaryRule::UnequalVariancesUnequalN => "unequal variances with unequal cell sizes",
        PrimaryRule::SkewSmallCells => "skew in small cells",
        PrimaryRule::NonNormalSmallN => "non-normal errors, equal variances, small cells",
        PrimaryRule::NoneOfTheAbove => "no assumption flagged",
    }
}

fn applicable_rules(flags: &[Flag], cell_sizes: &[usize]) -> Vec<Applicable> {
    let has = |code: &str| flags.iter().any(|f| f.code == code);
    let fired = |codes: &[&str]| -> Vec<String> {
        let mut v: Vec<String> = codes.iter().filter(|c| has(c)).map(|c| c.to_string()).collect();
        v.dedup();
        v
    };
    let min_n = cell_sizes.iter().copied().min().unwrap_or(0);
    let small = min_n < SMALL_CELL_N;
    let small_words = format!("smallest cell n = {min_n} < {SMALL_CELL_N}");
    let mut rules = Vec::new();
    if has("discrete-outcome") {
        rules.push(Applicable {
            rule: PrimaryRule::OrdinalOrTied,
            candidates: vec![("rank-ats", Requirement::Any)],
            reason: "the outcome takes at most 10 distinct values, with ties (an ordinal or heavily tied outcome)"
                .into(),
            citations: vec![
                "Brunner & Puri (2001), Statistical Papers 42:1–52",
                "Brunner, Konietschke, Pauly & Puri (2017), JRSS-B 79:1463–1485",
            ],
            flags: fired(&["discrete-outcome"]),
            notes: vec![
                "ART is not recommended as primary for a discrete outcome (Lüpsen 2017, 2018)".into(),
                "ordinal regression models are the model-based alternative (Liddell & Kruschke 2018, Journal of Experimental Social Psychology 79:328–348)".into(),
            ],
        });
    }
    let tails = fired(&["heavy-tails", "outliers", "far-out"]);
    if !tails.is_empty() {
        rules.push(Applicable {
            rule: PrimaryRule::HeavyTailsOrOutliers,
            candidates: vec![("trimmed", Requirement::Trimming)],
            reason: "the residuals have heavier tails or more outlying points than normal data with these cell sizes"
                .into(),
            citations: vec![
                "Wilcox & Keselman (2003), Psychological Methods 8:254–274",
                "Keselman, Wilcox & Lix (2003), Psychophysiology 40:586–596",
                "Wilcox (2017), Introduction to Robust Estimation and Hypothesis Testing",
            ],
            flags: tails,
            notes: vec!["the estimand is the trimmed mean of each cell, not its mean".into()],
        });
    }
    if has("unequal-variances-unequal-n") {
        let mut candidates = vec![("hc", Requirement::Hc3OrHc4), ("trimmed", Requirement::NoTrimming)];
        if small {
            candidates.insert(0, ("studentized-permutation", Requirement::Any));
        } else {
            candidates.push(("studentized-permutation", Requirement::Any));
        }
        rules.push(Applicable {
            rule: PrimaryRule::UnequalVariancesUnequalN,
            candidates,
            reason: if small {
                format!("cell variances differ beyond what normal data give, and cell sizes differ ({small_words})")
            } else {
                "cell variances differ beyond what normal data give, and cell sizes differ".into()
            },
            citations: vec![
                "Box (1954), Annals of Mathematical Statistics 25:290–302",
                "Lix, Keselman & Keselman (1996), Review of Educational Research 66:579–619",
                "Long & Ervin (2000), The American Statistician 54:217–224",
                "Blanca, Alarcón, Arnau, Bono & Bendayan (2018), Behavior Research Methods 50:937–962",
                "Pauly, Brunner & Konietschke (2015), JRSS-B 77:461–473 (small cells)",
            ],
            flags: fired(&["unequal-variances-unequal-n"]),
            notes: vec!["ART is not recommended as primary under unequal variances (METHODS §11.2)".into()],
        });
    }
    if has("skewed-residuals") && small {
        rules.push(Applicable {
            rule: PrimaryRule::SkewSmallCells,
            candidates: vec![("trimmed", Requirement::TrimmingWithBootstrap)],
            reason: format!("the residuals are skewed beyond what normal data give, in small cells ({small_words})"),
            citations: vec!["Keselman, Wilcox & Lix (2003), Psychophysiology 40:586–596"],
            flags: fired(&["skewed-residuals"]),
            notes: vec!["the estimand is the trimmed mean of each cell, not its mean".into()],
        });
    }
    let non_normal = fired(&["skewed-residuals", "heavy-tails", "outliers", "far-out"]);
    let unequal = has("unequal-variances") || has("unequal-variances-unequal-n");
    if !non_normal.is_empty() && !unequal && small {
        rules.push(Applicable {
            rule: PrimaryRule::NonNormalSmallN,
            candidates: vec![("permutation", Requirement::FreedmanLane)],
            reason: format!(
                "the residuals are not normal-looking, the variances are not flagged as unequal, and cells are small ({small_words})"
            ),
            citations: vec![
                "Freedman & Lane (1983), Journal of Business & Economic Statistics 1:292–298",
                "Anderson & ter Braak (2003), Journal of Statistical Computation and Simulation 73:85–113",
                "Winkler, Ridgway, Webster, Smith & Nichols (2014), NeuroImage 92:381–397",
            ],
            flags: non_normal,
            notes: Vec::new(),
        });
    }
    rules.push(Applicable {
        rule: PrimaryRule::NoneOfTheAbove,
        candidates: vec![("classical", Requirement::Any)],
        reason: "no earlier rule chose an engine that ran; the F test is fairly robust to moderate non-normality"
            .into(),
        citations: vec![
            "Harwell, Rubinstein, Hayes & Olds (1992), Journal of Educational Statistics 17:315–339",
            "Blanca, Alarcón, Arnau, Bono & Bendayan (2017), Psicothema 29:552–557",
        ],
        flags: Vec::new(),
        notes: Vec::new(),
    });
    rules
}

/// Whether `engine` ran on at least one term, with the reason when it did not.
fn ran<'a>(engines: &'a [EngineResult], id: &str) -> Result<&'a EngineResult, String> {
    let Some(e) = engines.iter().find(|e| e.engine == id) else {
        return Err(format!("`{id}` was not run (not in --engines)"));
    };
    if e.terms.iter().all(|t| t.not_applicable.is_some()) {
        let why = e.terms.iter().find_map(|t| t.not_applicable.clone()).unwrap_or_else(|| "no terms".into());
        return Err(format!("`{id}` could not run on these data ({why})"));
    }
    Ok(e)
}

const SELECTION_NOTE: &str = "chosen from the calibrated diagnostics flags before any engine's p-value was read, never from p-values of assumption tests (Zimmerman 2004, British Journal of Mathematical and Statistical Psychology 57:173–181)";

/// The rules' choice (ignoring `fixed`).
fn by_rules(inputs: &Inputs<'_>) -> PrimaryChoice {
    let mut skipped = Vec::new();
    for rule in applicable_rules(inputs.flags, inputs.cell_sizes) {
        let mut why_not = Vec::new();
        for (id, req) in &rule.candidates {
            let found = ran(inputs.engines, id)
                .and_then(|e| req.check(&e.settings).map_err(|w| format!("`{id}` did not qualify: {w}")).map(|_| e));
            match found {
                Ok(e) => {
                    let number = rule_number(rule.rule);
                    let flags_words = if rule.flags.is_empty() {
                        String::new()
                    } else {
                        format!(" (flags: {})", rule.flags.join(", "))
                    };
                    let mut notes = rule.notes.clone();
                    notes.push(SELECTION_NOTE.into());
                    if id == &"hc" && rule.rule == PrimaryRule::UnequalVariancesUnequalN {
                        notes.push(
                            "with very uneven cell sizes HC4 is the safer covariance (Cribari-Neto 2004; --hc 4)"
                                .into(),
                        );
                    }
                    return PrimaryChoice {
                        engine: Some(id.to_string()),
                        settings: e.settings.clone(),
                        fixed: false,
                        rule: Some(rule.rule),
                        rule_number: Some(number),
                        reason: format!(
                            "rule {number}, {}: {}{flags_words}; primary engine: {} ({})",
                            rule_words(rule.rule),
                            rule.reason,
                            profile::name(id),
                            profile::settings_words(id, &e.settings)
                        ),
                        citations: rule.citations.iter().map(|c| c.to_string()).collect(),
                        flags: rule.flags.clone(),
                        skipped,
                        rules_would_choose: None,
                        notes,
                    };
                }
                Err(w) => why_not.push(w),
            }
        }
        skipped.push(SkippedRule { rule: rule.rule, number: rule_number(rule.rule), why: why_not.join("; ") });
    }
    PrimaryChoice {
        engine: None,
        settings: BTreeMap::new(),
        fixed: false,
        rule: None,
        rule_number: None,
        reason: "no primary engine: none of the engines the rules name ran; agreement is read against the majority"
            .into(),
        citations: Vec::new(),
        flags: Vec::new(),
        skipped,
        rules_would_choose: None,
        notes: vec![SELECTION_NOTE.into()],
    }
}

/// The primary engine for these diagnostics and engines (METHODS §11.2), or the engine
/// the user fixed in advance.
pub fn choose(inputs: &Inputs<'_>) -> PrimaryChoice {
    let rules = by_rules(inputs);
    let Some(fixed) = inputs.fixed else {
        return rules;
    };
    let mut notes = Vec::new();
    let settings = match ran(inputs.engines, fixed) {
        Ok(e) => e.settings.clone(),
        Err(why) => {
            notes.push(format!(
                "the fixed primary engine did not run: {why}; it stays primary because it was fixed in advance, and agreement is read against the majority"
            ));
            inputs.engines.iter().find(|e| e.engine == fixed).map(|e| e.settings.clone()).unwrap_or_default()
        }
    };
    let would = rules.engine.clone();
    if let Some(w) = &would {
        if w != fixed {
            notes.push(format!(
                "the pre-specified rules would have chosen {} (rule {}); shown for information, not substituted",
                profile::name(w),
                rules.rule_number.unwrap_or(0)
            ));
        }
    }
    PrimaryChoice {
        engine: Some(fixed.to_string()),
        reason: format!(
            "fixed in advance by the user (--primary {fixed}); primary engine: {}{}",
            profile::name(fixed),
            match profile::settings_words(fixed, &settings) {
                s if s.is_empty() => String::new(),
                s => format!(" ({s})"),
            }
        ),
        settings,
        fixed: true,
        rule: None,
        rule_number: None,
        citations: Vec::new(),
        flags: Vec::new(),
        skipped: Vec::new(),
        rules_would_choose: would,
        notes,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::results::TermResult;
    use serde_json::json;

    fn flag(code: &str) -> Flag {
        Flag { code: code.into(), message: String::new() }
    }

    fn engine(id: &str, settings: &[(&str, Value)], runs: bool) -> EngineResult {
        let mut t = TermResult::not_applicable("A", "cell A=a1 has one observation");
        if runs {
            t.not_applicable = None;
        }
        EngineResult {
            engine: id.into(),
            settings: settings.iter().map(|(k, v)| (k.to_string(), v.clone())).collect(),
            terms: vec![t],
            details: None,
            notes: vec![],
        }
    }

    /// Every engine, with default settings, running.
    fn all() -> Vec<EngineResult> {
        vec![
            engine("classical", &[], true),
            engine("hc", &[("hc", json!("HC3"))], true),
            engine("trimmed", &[("trim", json!(0.2)), ("reference", json!("f"))], true),
            engine("permutation", &[("scheme", json!("freedman-lane"))], true),
            engine("studentized-permutation", &[], true),
            engine("art", &[], true),
            engine("rank-ats", &[("ranks", json!("mid-ranks"))], true),
            engine("bootstrap", &[], true),
        ]
    }

    fn pick(flags: &[&str], n: &[usize], engines: &[EngineResult], fixed: Option<&str>) -> PrimaryChoice {
        let flags: Vec<Flag> = flags.iter().map(|c| flag(c)).collect();
        choose(&Inputs { flags: &flags, cell_sizes: n, engines, fixed })
    }

    const BIG: [usize; 4] = [20, 20, 30, 30];
    const SMALL: [usize; 4] = [5, 8, 8, 8];

    #[test]
    fn each_rule_picks_its_engine() {
        let e = all();
        let c = pick(&["discrete-outcome", "heavy-tails"], &BIG, &e, None);
        assert_eq!((c.engine.as_deref(), c.rule_number), (Some("rank-ats"), Some(1)));
        assert!(c.notes.iter().any(|n| n.contains("ART is not recommended")));
        assert!(c.citations.iter().any(|x| x.contains("Brunner & Puri")));
        for code in ["heavy-tails", "outliers", "far-out"] {
            let c = pick(&[code, "unequal-variances-unequal-n"], &BIG, &e, None);
            assert_eq!((c.engine.as_deref(), c.rule_number), (Some("trimmed"), Some(2)), "{code}");
            assert_eq!(c.flags, vec![code.to_string()]);
            assert!(c.reason.contains("20% trimming"), "{}", c.reason);
        }
        let c = pick(&["unequal-variances", "unequal-variances-unequal-n"], &BIG, &e, None);
        assert_eq!((c.engine.as_deref(), c.rule_number), (Some("hc"), Some(3)));
        let c = pick(&["unequal-variances", "unequal-variances-unequal-n"], &SMALL, &e, None);
        assert_eq!((c.engine.as_deref(), c.rule_number), (Some("studentized-permutation"), Some(3)));
        // Rule 4 needs the bootstrap critical value: with the default F reference the
        // trimmed engine does not qualify and rule 5 (Freedman–Lane) serves instead.
        let c = pick(&["skewed-residuals"], &SMALL, &e, None);
        assert_eq!((c.engine.as_deref(), c.rule_number), (Some("permutation"), Some(5)));
        assert_eq!(c.skipped.len(), 1);
        assert_eq!(c.skipped[0].number, 4);
        assert!(c.skipped[0].why.contains("bootstrap critical value"), "{}", c.skipped[0].why);
        let mut boot = all();
        boot[2] = engine("trimmed", &[("trim", json!(0.2)), ("reference", json!("bootstrap"))], true);
        let c = pick(&["skewed-residuals"], &SMALL, &boot, None);
        assert_eq!((c.engine.as_deref(), c.rule_number), (Some("trimmed"), Some(4)));
        // Skew in large cells: rules 4 and 5 do not apply; the F test is the primary.
        let c = pick(&["skewed-residuals"], &BIG, &e, None);
        assert_eq!((c.engine.as_deref(), c.rule_number), (Some("classical"), Some(6)));
        // Rule 5 needs equal variances.
        let c = pick(&["skewed-residuals", "unequal-variances"], &SMALL, &boot[..2], None);
        assert_eq!((c.engine.as_deref(), c.rule_number), (Some("classical"), Some(6)));
        let c = pick(&[], &BIG, &e, None);
        assert_eq!((c.engine.as_deref(), c.rule_number), (Some("classical"), Some(6)));
        assert!(c.skipped.is_empty() && !c.fixed);
        // Structural flags other than discrete-outcome, and p-value-free flags such as
        // many-ties, choose nothing.
        let c = pick(&["many-ties", "unequal-variances", "mad-zero"], &BIG, &e, None);
        assert_eq!(c.rule_number, Some(6));
    }

    #[test]
    fn a_rule_whose_engine_did_not_run_falls_through_and_says_so() {
        let e: Vec<EngineResult> = all().into_iter().filter(|e| e.engine != "trimmed").collect();
        let c = pick(&["heavy-tails"], &BIG, &e, None);
        assert_eq!((c.engine.as_deref(), c.rule_number), (Some("classical"), Some(6)));
        assert_eq!(c.skipped[0].number, 2);
        assert!(c.skipped[0].why.contains("not in --engines"), "{}", c.skipped[0].why);
        // Ran but not applicable on every term counts as not run.
        let mut e = all();
        e[2] = engine("trimmed", &[("trim", json!(0.2))], false);
        let c = pick(&["far-out"], &BIG, &e, None);
        assert_eq!(c.rule_number, Some(6));
        assert!(c.skipped[0].why.contains("could not run on these data"), "{}", c.skipped[0].why);
        // Trimming switched off: rule 2 does not qualify, but rule 3 takes WJ with γ = 0
        // when hc did not run.
        let e = vec![engine("trimmed", &[("trim", json!(0.0))], true), engine("classical", &[], true)];
        let c = pick(&["heavy-tails", "unequal-variances-unequal-n"], &BIG, &e, None);
        assert_eq!((c.engine.as_deref(), c.rule_number), (Some("trimmed"), Some(3)));
        assert!(c.skipped[0].why.contains("without trimming"));
        // HC0 is not what rule 3 names.
        let e = vec![engine("hc", &[("hc", json!("HC0"))], true), engine("classical", &[], true)];
        let c = pick(&["unequal-variances-unequal-n"], &BIG, &e, None);
        assert_eq!(c.rule_number, Some(6));
        assert!(c.skipped[0].why.contains("HC0"));
        // A permutation engine with another scheme does not serve rule 5.
        let e = vec![engine("permutation", &[("scheme", json!("manly"))], true)];
        let c = pick(&["skewed-residuals"], &SMALL, &e, None);
        assert_eq!(c.engine, None);
        assert_eq!(c.skipped.iter().map(|s| s.number).collect::<Vec<_>>(), vec![4, 5, 6]);
    }

    #[test]
    fn no_engine_the_rules_name_ran() {
        let e = vec![engine("art", &[], true)];
        let c = pick(&[], &BIG, &e, None);
        assert_eq!(c.engine, None);
        assert_eq!(c.rule, None);
        assert!(c.reason.starts_with("no primary engine"));
        let none: Vec<EngineResult> = Vec::new();
        assert_eq!(pick(&["heavy-tails"], &BIG, &none, None).engine, None);
    }

    #[test]
    fn a_fixed_primary_is_kept_and_the_rules_choice_shown() {
        let e = all();
        let c = pick(&["heavy-tails"], &BIG, &e, Some("classical"));
        assert!(c.fixed);
        assert_eq!(c.engine.as_deref(), Some("classical"));
        assert_eq!(c.rules_would_choose.as_deref(), Some("trimmed"));
        assert!(c.reason.contains("fixed in advance"), "{}", c.reason);
        assert!(c.notes.iter().any(|n| n.contains("would have chosen trimmed Welch–James")));
        // Fixed but not run: kept (preregistered), with a note.
        let e: Vec<EngineResult> = all().into_iter().filter(|e| e.engine != "art").collect();
        let c = pick(&[], &BIG, &e, Some("art"));
        assert_eq!(c.engine.as_deref(), Some("art"));
        assert!(c.notes.iter().any(|n| n.contains("did not run")), "{:?}", c.notes);
        // Fixed, ran, but not applicable on every term.
        let mut e = all();
        e[5] = engine("art", &[], false);
        let c = pick(&[], &BIG, &e, Some("art"));
        assert!(c.notes.iter().any(|n| n.contains("could not run on these data")), "{:?}", c.notes);
        // Fixed equal to the rules' choice: no substitution note.
        let c = pick(&[], &BIG, &all(), Some("classical"));
        assert!(c.notes.is_empty(), "{:?}", c.notes);
    }
}
