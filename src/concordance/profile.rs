//! What each engine id stands for, in words a reader and a reviewer need: the family of
//! its hypothesis (METHODS §11.1), the hypothesis itself, a short name, a methods-section
//! phrase with the settings it ran with, its citations, and where its signed estimate
//! of a 1-df term comes from.
//!
//! The concordance and the report read engines only through these profiles, so an
//! engine id quorum does not know (a future engine) still works: it gets
//! [`HypothesisFamily::Other`], its id as its name and no citation. The ids are fixed
//! by DESIGN.md. Citations marked \[M\] in METHODS.md are from memory there and here.

use crate::results::HypothesisFamily;
use serde_json::Value;
use std::collections::BTreeMap;

/// Where an engine's signed estimate of a 1-df term comes from (METHODS §11.1,
/// "for 1-df effects the sign of the estimate").
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SignedEstimate {
    /// The unweighted contrast of cell means ℓ'ȳ: every engine that tests L μ = 0 on
    /// means estimates it, whatever its reference distribution.
    MeanContrast,
    /// A signed effect the engine reports itself, by name.
    Effect(&'static str),
    /// No signed estimate (ART's aligned-rank scale, unknown engines).
    None,
}

/// The description of one engine id.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Profile {
    /// Engine id (DESIGN.md).
    pub id: &'static str,
    /// Family of its hypothesis.
    pub family: HypothesisFamily,
    /// Column label in the concordance table (the id, shortened where it is long).
    pub short: &'static str,
    /// Short name for tables and sentences, e.g. `trimmed Welch–James`.
    pub name: &'static str,
    /// Its null hypothesis in a few words.
    pub hypothesis: &'static str,
    /// Literature (author, year), for the methods paragraph.
    pub citations: &'static [&'static str],
    /// Source of its signed estimate for 1-df terms.
    pub signed: SignedEstimate,
}

const PROFILES: [Profile; 8] = [
    Profile {
        id: "classical",
        short: "classical",
        family: HypothesisFamily::Means,
        name: "classical F",
        hypothesis: "equal means (normal errors, equal variances)",
        citations: &[],
        signed: SignedEstimate::MeanContrast,
    },
    Profile {
        id: "hc",
        short: "hc",
        family: HypothesisFamily::Means,
        name: "HC Wald F",
        hypothesis: "equal means, variances free",
        citations: &["White, 1980", "MacKinnon & White, 1985", "Long & Ervin, 2000"],
        signed: SignedEstimate::MeanContrast,
    },
    Profile {
        id: "trimmed",
        short: "trimmed",
        family: HypothesisFamily::TrimmedMeans,
        name: "trimmed Welch–James",
        hypothesis: "equal trimmed means, variances free",
        citations: &["Johansen, 1980", "Keselman, Wilcox & Lix, 2003", "Wilcox, 2017"],
        signed: SignedEstimate::Effect("robust_d"),
    },
    Profile {
        id: "permutation",
        short: "perm",
        family: HypothesisFamily::Means,
        name: "permutation F",
        hypothesis: "equal means, exchangeable errors",
        citations: &["Freedman & Lane, 1983", "Anderson & ter Braak, 2003"],
        signed: SignedEstimate::MeanContrast,
    },
    Profile {
        id: "studentized-permutation",
        short: "stud-perm",
        family: HypothesisFamily::Means,
        name: "studentized permutation",
        hypothesis: "equal means, variances free",
        citations: &["Janssen, 1997", "Pauly, Brunner & Konietschke, 2015"],
        signed: SignedEstimate::MeanContrast,
    },
    Profile {
        id: "art",
        short: "art",
        family: HypothesisFamily::AlignedRanks,
        name: "aligned rank transform",
        hypothesis: "no effect on the aligned-rank scale",
        citations: &["Higgins & Tashtoush, 1994", "Wobbrock, Findlater, Gergle & Higgins, 2011"],
        signed: SignedEstimate::None,
    },
    Profile {
        id: "rank-ats",
        short: "rank-ats",
        family: HypothesisFamily::RelativeEffects,
        name: "rank ANOVA-type statistic",
        hypothesis: "equal relative effects (distribution functions)",
        citations: &["Brunner, Dette & Munk, 1997", "Brunner, Konietschke, Pauly & Puri, 2017"],
        signed: SignedEstimate::Effect("relative_effect_difference"),
    },
    Profile {
        id: "bootstrap",
        short: "boot",
        family: HypothesisFamily::Means,
        name: "wild bootstrap",
        hypothesis: "equal means, variances free",
        citations: &["Wu, 1986", "Liu, 1988", "Mammen, 1993", "Davidson & Flachaire, 2008"],
        signed: SignedEstimate::MeanContrast,
    },
];

/// The profile of `id`, or a generic one (family `Other`, no citation) for an id quorum
/// does not describe.
pub fn profile(id: &str) -> Profile {
    PROFILES.iter().find(|p| p.id == id).copied().unwrap_or(Profile {
        id: "other",
        short: "other",
        family: HypothesisFamily::Other,
        name: "engine",
        hypothesis: "its own hypothesis",
        citations: &[],
        signed: SignedEstimate::None,
    })
}

/// A display name: the profile's name, or the id itself for an unknown engine.
pub fn name(id: &str) -> String {
    let p = profile(id);
    if p.family == HypothesisFamily::Other {
        id.to_string()
    } else {
        p.name.to_string()
    }
}

/// The concordance-table label of an engine id (the id itself for an unknown engine).
pub fn short(id: &str) -> String {
    let p = profile(id);
    if p.family == HypothesisFamily::Other {
        id.to_string()
    } else {
        p.short.to_string()
    }
}

/// The family in words (plural noun phrase), e.g. "means", "20% trimmed means".
pub fn family_words(family: HypothesisFamily) -> &'static str {
    match family {
        HypothesisFamily::Means => "means",
        HypothesisFamily::TrimmedMeans => "trimmed means",
        HypothesisFamily::AlignedRanks => "aligned ranks",
        HypothesisFamily::RelativeEffects => "relative effects",
        HypothesisFamily::Other => "other",
    }
}

fn text(settings: &BTreeMap<String, Value>, key: &str) -> Option<String> {
    settings.get(key).and_then(|v| v.as_str()).map(str::to_string)
}

fn number(settings: &BTreeMap<String, Value>, key: &str) -> Option<f64> {
    settings.get(key).and_then(Value::as_f64)
}

/// A proportion as a percentage without needless decimals: 0.2 → `20%`, 0.125 → `12.5%`.
pub fn percent(x: f64) -> String {
    let v = (x * 100.0 * 1e6).round() / 1e6;
    format!("{v}%")
}

/// A whole count with thousands separators (APA: 4,999).
pub fn count(n: u64) -> String {
    let s = n.to_string();
    let mut out = String::new();
    for (i, ch) in s.chars().enumerate() {
        if i > 0 && (s.len() - i) % 3 == 0 {
            out.push(',');
        }
        out.push(ch);
    }
    out
}

/// The trimming proportion of a `trimmed` engine's settings (None when absent).
pub fn trim(settings: &BTreeMap<String, Value>) -> Option<f64> {
    number(settings, "trim")
}

/// The settings that shape an engine's test, in words (for tables, the primary-engine
/// line and the methods paragraph): HC type, trimming and reference distribution,
/// permutation scheme and count, ranks, bootstrap weights and count.
pub fn settings_words(id: &str, settings: &BTreeMap<String, Value>) -> String {
    let mut parts: Vec<String> = Vec::new();
    match id {
        "classical" => parts.push("Type III sums of squares, sum-to-zero coding".into()),
        "hc" => parts.extend(text(settings, "hc").map(|h| format!("{h} covariance"))),
        "trimmed" => {
            if let Some(t) = trim(settings) {
                parts.push(if t > 0.0 { format!("{} trimming", percent(t)) } else { "no trimming (γ = 0)".into() });
            }
            parts.extend(text(settings, "reference").map(|r| match r.as_str() {
                "f" => "F approximation".to_string(),
                "adjusted" => "adjusted χ² critical value".to_string(),
                "bootstrap" => match number(settings, "resamples") {
                    Some(b) => format!("bootstrap critical value, {} resamples", count(b as u64)),
                    None => "bootstrap critical value".to_string(),
                },
                other => format!("reference {other}"),
            }));
        }
        "permutation" | "studentized-permutation" => {
            if let Some(s) = text(settings, "scheme") {
                parts.push(scheme_words(&s));
            }
            if let Some(b) = number(settings, "permutations") {
                parts.push(format!("{} permutations", count(b as u64)));
            }
        }
        "art" => parts.push("mid-ranks of aligned responses".into()),
        "rank-ats" => parts.extend(text(settings, "ranks")),
        "bootstrap" => {
            if let Some(w) = text(settings, "wild_weights") {
                parts.push(format!("{} weights", capitalised(&w)));
            }
            if let Some(b) = number(settings, "resamples") {
                parts.push(format!("{} resamples", count(b as u64)));
            }
        }
        _ => {}
    }
    parts.join(", ")
}

fn scheme_words(id: &str) -> String {
    match id {
        "freedman-lane" => "Freedman–Lane scheme".into(),
        "ter-braak" => "ter Braak scheme".into(),
        "manly" => "raw-data (Manly) scheme".into(),
        other => format!("{other} scheme"),
    }
}

fn capitalised(s: &str) -> String {
    let mut c = s.chars();
    match c.next() {
        Some(f) => f.to_uppercase().collect::<String>() + c.as_str(),
        None => String::new(),
    }
}

/// The engine as a methods-section phrase with its settings, e.g. "Johansen's
/// Welch–James test on 20% trimmed means (F approximation; Johansen, 1980; …)".
pub fn methods_phrase(id: &str, settings: &BTreeMap<String, Value>) -> String {
    let p = profile(id);
    let what = match id {
        "classical" => "the classical F test".to_string(),
        "hc" => {
            let h = text(settings, "hc").unwrap_or_else(|| "HC".into());
            format!("a Wald F test with the {h} heteroscedasticity-consistent covariance of the cell means")
        }
        "trimmed" => match trim(settings) {
            Some(t) if t > 0.0 => format!("Johansen's Welch–James test on {} trimmed means", percent(t)),
            _ => "Johansen's Welch–James test on untrimmed means".to_string(),
        },
        "permutation" => "a permutation test of the F statistic".to_string(),
        "studentized-permutation" => "a studentized (Wald-type) permutation test".to_string(),
        "art" => "the aligned rank transform ANOVA".to_string(),
        "rank-ats" => "the rank-based ANOVA-type statistic".to_string(),
        "bootstrap" => "a wild-bootstrap test of the HC3 Wald F".to_string(),
        other => format!("the `{other}` engine"),
    };
    let mut inner: Vec<String> = Vec::new();
    // Settings not already named in the phrase.
    let extra = match id {
        "classical" | "hc" => String::new(),
        "trimmed" => settings_words(id, settings).split(", ").skip(1).collect::<Vec<_>>().join(", "),
        _ => settings_words(id, settings),
    };
    if !extra.is_empty() {
        inner.push(extra);
    }
    let mut cites: Vec<&str> = p.citations.to_vec();
    if id == "hc" && text(settings, "hc").as_deref() == Some("HC4") {
        cites.push("Cribari-Neto, 2004");
    }
    if !cites.is_empty() {
        inner.push(cites.join("; "));
    }
    if inner.is_empty() {
        what
    } else {
        format!("{what} ({})", inner.join("; "))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use serde_json::json;

    #[test]
    fn every_design_id_has_a_profile_and_unknown_ids_a_generic_one() {
        for id in
            ["classical", "hc", "trimmed", "permutation", "studentized-permutation", "art", "rank-ats", "bootstrap"]
        {
            assert_eq!(profile(id).id, id);
            assert_ne!(profile(id).family, HypothesisFamily::Other);
        }
        assert_eq!(profile("future").family, HypothesisFamily::Other);
        assert_eq!(name("future"), "future");
        assert_eq!(methods_phrase("future", &BTreeMap::new()), "the `future` engine");
    }

    #[test]
    fn settings_read_as_words() {
        let mut s = BTreeMap::new();
        s.insert("trim".to_string(), json!(0.2));
        s.insert("reference".to_string(), json!("bootstrap"));
        s.insert("resamples".to_string(), json!(1999));
        assert_eq!(settings_words("trimmed", &s), "20% trimming, bootstrap critical value, 1,999 resamples");
        assert!(methods_phrase("trimmed", &s).starts_with("Johansen's Welch–James test on 20% trimmed means ("));
        s.insert("trim".to_string(), json!(0.0));
        assert!(methods_phrase("trimmed", &s).contains("untrimmed"));
        let mut h = BTreeMap::new();
        h.insert("hc".to_string(), json!("HC4"));
        assert!(methods_phrase("hc", &h).contains("Cribari-Neto, 2004"));
        assert_eq!(percent(0.125), "12.5%");
        assert_eq!(count(99_999), "99,999");
        assert_eq!(count(999), "999");
    }
}
