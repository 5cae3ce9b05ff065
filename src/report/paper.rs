//! Text for the paper: one APA-style result sentence per term for the primary engine,
//! a one-line summary of the other engines, and a methods paragraph naming every engine
//! that ran with its citation and settings, the seed, the version and the command.
//!
//! Number style follows [`super::apa`] (APA 7th edition): `F(2, 51) = 4.54, p = .015,
//! partial η² = .15, 95% CI [.01, .30]`. Statistical symbols are [`Style::Symbol`]
//! spans (italic in Markdown). The sentences say "statistically significant" for a
//! rejection at α and name the engine, so a reader knows which hypothesis was tested.
//! Everything is read from the results; nothing is computed here.

use super::apa;
use super::doc::{Inline, Style};
use crate::concordance::profile;
use crate::results::{Analysis, Concordance, Decision, Effect, EngineResult, TermResult, Verdict};

/// The significance level the engines used (from their settings; 0.05 when absent).
pub fn alpha(a: &Analysis) -> f64 {
    a.engines.iter().find_map(|e| e.settings.get("alpha").and_then(|v| v.as_f64())).unwrap_or(0.05)
}

/// "The main effect of A" / "The A × B interaction".
pub fn term_phrase(term: &str) -> String {
    let parts: Vec<&str> = term.split(':').collect();
    if parts.len() == 1 {
        format!("The main effect of {term}")
    } else {
        format!("The {} interaction", parts.join(" × "))
    }
}

fn result_of<'a>(a: &'a Analysis, engine: &str, term: &str) -> Option<(&'a EngineResult, &'a TermResult)> {
    let e = a.engines.iter().find(|e| e.engine == engine)?;
    Some((e, e.terms.iter().find(|t| t.term == term)?))
}

/// The statistic with its df and the p-value, e.g. `F(2, 51) = 4.54, p = .015`, plus
/// the Monte Carlo count for resampled p-values.
pub fn statistic(e: &EngineResult, r: &TermResult, alpha: f64) -> Inline {
    let reference = e.settings.get("reference").and_then(|v| v.as_str()).unwrap_or("");
    let symbol = match (e.engine.as_str(), reference) {
        ("studentized-permutation", _) => "W",
        ("trimmed", "adjusted" | "bootstrap") => "Q",
        _ => "F",
    };
    let mut l = Inline::new();
    if let Some(s) = r.statistic {
        let dfs = match (r.df1, r.df2) {
            (Some(a), Some(b)) => format!("({}, {})", apa::df(a), apa::df(b)),
            (Some(a), None) => format!("({})", apa::df(a)),
            _ => String::new(),
        };
        l = l.add(Style::Symbol, symbol).text(format!("{dfs} = {}, ", apa::stat(s)));
    }
    if let Some(p) = r.p {
        let phrase = apa::p_phrase(p, alpha);
        l = l.add(Style::Symbol, "p").text(phrase.trim_start_matches('p').to_string());
    }
    if let Some(m) = &r.mc {
        if m.exact {
            l = l.text(format!(" (exact, {} rearrangements)", profile::count(m.resamples)));
        } else {
            l = l.text(format!(" (Monte Carlo, {} resamples)", profile::count(m.resamples)));
        }
    }
    l
}

fn effect_words(e: &Effect) -> Option<String> {
    let v = e.value?;
    let (label, bounded) = match e.name.as_str() {
        "partial_eta_squared" => ("partial η²", true),
        "partial_omega_squared" => ("partial ω²", true),
        "partial_eta_squared_aligned_ranks" => ("partial η² on aligned ranks", true),
        "robust_d" => ("robust d", false),
        "relative_effect_difference" => ("difference of relative effects", true),
        other => (other, false),
    };
    let label = if e.name.starts_with("partial") || e.name == "robust_d" || e.name == "relative_effect_difference" {
        label.to_string()
    } else {
        e.name.replace('_', " ")
    };
    let value = if bounded { apa::unit(v) } else { apa::value(v) };
    let ci = match (e.ci_low, e.ci_high, e.ci_level) {
        (Some(lo), Some(hi), Some(level)) if bounded => format!(", {}", apa::ci_unit(lo, hi, level)),
        (Some(lo), Some(hi), Some(level)) => format!(", {}", apa::ci_value(lo, hi, level)),
        _ => String::new(),
    };
    Some(format!("{label} = {value}{ci}"))
}

/// The effect-size part of a result sentence: the engine's own partial η² (with its
/// interval) or its headline effect, then the classical partial η² when the primary
/// engine has none of its own.
fn effect_part(a: &Analysis, e: &EngineResult, r: &TermResult) -> Option<String> {
    let own_eta = r.effects.iter().find(|x| x.name == "partial_eta_squared").and_then(effect_words);
    if let Some(w) = own_eta {
        return Some(w);
    }
    let mut parts: Vec<String> = r.effect.as_ref().and_then(effect_words).into_iter().collect();
    if e.engine != "classical" {
        if let Some((_, c)) = result_of(a, "classical", &r.term) {
            if let Some(w) = c.effects.iter().find(|x| x.name == "partial_eta_squared").and_then(effect_words) {
                parts.push(format!("{w} (classical ANOVA)"));
            }
        }
    }
    (!parts.is_empty()).then(|| parts.join("; "))
}

/// The APA result sentence for one term, from the primary engine.
pub fn result_sentence(a: &Analysis, c: &Concordance) -> Inline {
    let alpha = alpha(a);
    let phrase = term_phrase(&c.term);
    let Some(primary) = c.primary.as_deref() else {
        return Inline::plain(format!("{phrase}: no primary engine was chosen; ")).extend(others_summary(a, c, None));
    };
    let name = profile::name(primary);
    let Some((e, r)) = result_of(a, primary, &c.term) else {
        return Inline::plain(format!(
            "{phrase} could not be tested with the {name} (primary engine), which did not run. "
        ))
        .extend(others_summary(a, c, Some(primary)));
    };
    if let Some(why) = &r.not_applicable {
        return Inline::plain(format!("{phrase} could not be tested with the {name} (primary engine): {why}. "))
            .extend(others_summary(a, c, Some(primary)));
    }
    let verb = match r.decision {
        Some(Decision::Reject) => "was statistically significant",
        Some(Decision::Retain) => "was not statistically significant",
        Some(Decision::Undetermined) => "could not be decided at the Monte Carlo precision reached",
        None => "could not be tested",
    };
    let mut l =
        Inline::plain(format!("{phrase} {verb} with the {name} (primary engine), ")).extend(statistic(e, r, alpha));
    if let Some(eff) = effect_part(a, e, r) {
        l = l.text(format!(", {eff}"));
    }
    l = l.text(". ");
    if c.borderline {
        l = l.text("This ").add(Style::Symbol, "p").text(" is borderline (within a factor √10 of α). ");
    }
    l.extend(others_summary(a, c, Some(primary)))
}

/// "Other engines: 4 of 4 reject at α = .05 (classical p = .015; …); verdict across
/// engines: method-dependent."
pub fn others_summary(a: &Analysis, c: &Concordance, primary: Option<&str>) -> Inline {
    let alpha = alpha(a);
    let others: Vec<&crate::results::EngineCall> =
        c.engines.iter().filter(|x| Some(x.engine.as_str()) != primary).collect();
    if others.is_empty() {
        return Inline::new();
    }
    let deciding: Vec<_> =
        others.iter().filter(|x| matches!(x.decision, Some(Decision::Reject) | Some(Decision::Retain))).collect();
    let rejecting = deciding.iter().filter(|x| x.decision == Some(Decision::Reject)).count();
    let mut l = Inline::plain(format!(
        "{}: {rejecting} of {} reject at α = {} (",
        if primary.is_some() { "Other engines" } else { "Engines" },
        deciding.len(),
        apa::alpha(alpha)
    ));
    for (i, x) in others.iter().enumerate() {
        if i > 0 {
            l = l.text("; ");
        }
        l = match (x.decision, x.p) {
            (None, _) => l.text(format!("{} not applicable", x.engine)),
            (Some(Decision::Undetermined), Some(p)) => l
                .text(format!("{} ", x.engine))
                .add(Style::Symbol, "p")
                .text(format!("{}, undetermined", apa::p_phrase(p, alpha).trim_start_matches('p'))),
            (_, Some(p)) => l
                .text(format!("{} ", x.engine))
                .add(Style::Symbol, "p")
                .text(apa::p_phrase(p, alpha).trim_start_matches('p').to_string()),
            (_, None) => l.text(x.engine.clone()),
        };
    }
    let verdict = match c.verdict {
        Verdict::Holds => "holds (every engine that decided rejects)",
        Verdict::NullHolds => "null holds (no engine that decided rejects)",
        Verdict::MethodDependent => "method-dependent",
        Verdict::Undetermined => "undetermined (no engine could decide)",
    };
    l.text("); verdict across engines: ").add(Style::Verdict(c.verdict), verdict).text(".")
}

/// An in-text citation from a reference: `Wilcox & Keselman (2003), Psychological
/// Methods 8:254–274` → `Wilcox & Keselman, 2003`; other strings unchanged.
pub fn in_text(reference: &str) -> String {
    match reference.split_once(" (") {
        Some((authors, rest)) => match rest.split_once(')') {
            Some((year, _)) if year.chars().all(|c| c.is_ascii_digit()) => format!("{authors}, {year}"),
            _ => reference.to_string(),
        },
        None => reference.to_string(),
    }
}

/// The methods paragraph.
pub fn methods_paragraph(a: &Analysis) -> Inline {
    let r = &a.reproducibility;
    let alpha = alpha(a);
    let phrases: Vec<String> = a.engines.iter().map(|e| profile::methods_phrase(&e.engine, &e.settings)).collect();
    let engines = match phrases.len() {
        0 => "no engine".to_string(),
        1 => format!("one engine: {}", phrases[0]),
        n => format!("{n} engines: {}", phrases.join("; ")),
    };
    let mut text = format!(
        "Analyses were run with quorum {} (command \"{}\"; seed {}). Every main effect and interaction was tested on its Type III (sum-to-zero) hypothesis by {engines}. Decisions used α = {}",
        r.version,
        r.command,
        r.seed,
        apa::alpha(alpha)
    );
    if a.engines.iter().any(|e| e.terms.iter().any(|t| t.mc.is_some())) {
        text.push_str(
            "; a resampled p counted as undetermined when α lay inside its 99% Clopper–Pearson Monte Carlo interval",
        );
    }
    text.push('.');
    let level = a
        .engines
        .iter()
        .flat_map(|e| e.terms.iter())
        .flat_map(|t| t.effects.iter())
        .find(|x| x.name == "partial_eta_squared")
        .and_then(|x| x.ci_level);
    if let Some(level) = level {
        text.push_str(&format!(
            " Effect sizes are partial η² with {} confidence intervals from the noncentral F distribution (Steiger, 2004).",
            apa::level_words(level)
        ));
    }
    if let Some(p) = &a.primary_engine {
        match (&p.engine, p.fixed) {
            (Some(id), true) => text.push_str(&format!(
                " The primary engine, the {}, was fixed before the analysis.",
                profile::name(id)
            )),
            (Some(id), false) => text.push_str(&format!(
                " The primary engine, the {} ({}), was chosen before any p-value was read, by a pre-specified rule on calibrated diagnostics ({}; {}).",
                profile::name(id),
                profile::settings_words(id, &p.settings),
                p.rule.map(crate::concordance::primary::rule_words).unwrap_or("none"),
                p.citations.iter().map(|c| in_text(c)).collect::<Vec<_>>().join("; ")
            )),
            (None, _) => text.push_str(" No primary engine was designated; agreement is read against the majority."),
        }
    }
    for s in &a.sensitivity {
        if !s.rows_removed.is_empty() {
            text.push_str(&format!(
                " A sensitivity analysis repeated every engine without {} point{} flagged by the \"{}\" rule ({}); its p-values are descriptive.",
                s.rows_removed.len(),
                if s.rows_removed.len() == 1 { "" } else { "s" },
                s.rule,
                crate::diagnostics::flags::lines_phrase(&s.rows_removed)
            ));
        }
    }
    Inline::plain(text)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn term_phrases() {
        assert_eq!(term_phrase("dose"), "The main effect of dose");
        assert_eq!(term_phrase("A:B:C"), "The A × B × C interaction");
        assert_eq!(in_text("Wilcox & Keselman (2003), Psychological Methods 8:254–274"), "Wilcox & Keselman, 2003");
        assert_eq!(in_text("Wilcox (2017), Introduction"), "Wilcox, 2017");
        assert_eq!(in_text("no year"), "no year");
    }
}
