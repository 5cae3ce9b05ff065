//! Tabular export: the results as CSV tables for spreadsheets and other software.
//!
//! `--format csv` prints the per-engine, per-term table; a report folder also gets the
//! cell table, the marginal means and the verdicts. Text cells that a spreadsheet would
//! run as a formula (starting with `=`, `+`, `-`, `@`, tab or carriage return) are
//! prefixed with a single quote, as OWASP's guidance on CSV injection recommends;
//! numbers are written as numbers (a negative number is not text).

use super::Render;
use crate::results::{Analysis, Decision, Verdict};
use std::io::{self, Write};

/// The per-engine, per-term table on standard output.
pub struct Csv;

impl Render for Csv {
    fn render(&self, analysis: &Analysis, out: &mut dyn Write) -> io::Result<()> {
        out.write_all(terms_table(analysis).as_bytes())
    }
}

/// A text cell made safe for spreadsheets and quoted for CSV.
pub fn text_cell(s: &str) -> String {
    let guarded = if s.starts_with(['=', '+', '-', '@', '\t', '\r']) { format!("'{s}") } else { s.to_string() };
    if guarded.contains([',', '"', '\n', '\r']) {
        format!("\"{}\"", guarded.replace('"', "\"\""))
    } else {
        guarded
    }
}

/// A numeric cell (full precision, shortest round-trip form); empty when absent.
pub fn number_cell(x: Option<f64>) -> String {
    x.map(|v| format!("{v}")).unwrap_or_default()
}

fn row(cells: &[String]) -> String {
    let mut s = cells.join(",");
    s.push('\n');
    s
}

fn decision(d: Option<Decision>) -> String {
    Decision::word_or(d, "").to_string()
}

/// One row per engine and term.
pub fn terms_table(a: &Analysis) -> String {
    let mut s = row(&[
        "engine",
        "term",
        "statistic",
        "df1",
        "df2",
        "p",
        "decision",
        "effect",
        "effect_value",
        "effect_ci_low",
        "effect_ci_high",
        "resamples",
        "mc_se",
        "not_applicable",
    ]
    .map(String::from));
    for e in &a.engines {
        for t in &e.terms {
            let eff = t.effect.as_ref();
            s.push_str(&row(&[
                text_cell(&e.engine),
                text_cell(&t.term),
                number_cell(t.statistic),
                number_cell(t.df1),
                number_cell(t.df2),
                number_cell(t.p),
                decision(t.decision),
                eff.map(|x| text_cell(&x.name)).unwrap_or_default(),
                number_cell(eff.and_then(|x| x.value)),
                number_cell(eff.and_then(|x| x.ci_low)),
                number_cell(eff.and_then(|x| x.ci_high)),
                t.mc.as_ref().map(|m| m.resamples.to_string()).unwrap_or_default(),
                number_cell(t.mc.as_ref().map(|m| m.se)),
                text_cell(t.not_applicable.as_deref().unwrap_or("")),
            ]));
        }
    }
    s
}

/// One row per cell.
pub fn cells_table(a: &Analysis) -> String {
    let mut header: Vec<String> = a.design.factors.iter().map(|f| text_cell(&f.name)).collect();
    header.extend(
        [
            "n",
            "mean",
            "sd",
            "se",
            "median",
            "trimmed_mean",
            "trim",
            "winsorized_sd",
            "skewness",
            "excess_kurtosis",
            "min",
            "max",
        ]
        .map(String::from),
    );
    let mut s = row(&header);
    for c in &a.design.cells {
        let mut cells: Vec<String> = c.levels.iter().map(|l| text_cell(l)).collect();
        cells.extend([
            c.n.to_string(),
            number_cell(Some(c.mean)),
            number_cell(c.sd),
            number_cell(c.se),
            number_cell(Some(c.median)),
            number_cell(Some(c.trimmed_mean)),
            number_cell(Some(c.trim)),
            number_cell(c.winsorized_sd),
            number_cell(c.skewness),
            number_cell(c.excess_kurtosis),
            number_cell(Some(c.min)),
            number_cell(Some(c.max)),
        ]);
        s.push_str(&row(&cells));
    }
    s
}

/// One row per factor level.
pub fn marginal_means_table(a: &Analysis) -> String {
    let mut s = row(&[
        "factor",
        "level",
        "n",
        "unweighted_mean",
        "unweighted_ci_low",
        "unweighted_ci_high",
        "weighted_mean",
        "weighted_ci_low",
        "weighted_ci_high",
    ]
    .map(String::from));
    for m in &a.design.marginal_means {
        s.push_str(&row(&[
            text_cell(&m.factor),
            text_cell(&m.level),
            m.n.to_string(),
            number_cell(Some(m.unweighted_mean)),
            number_cell(m.unweighted_ci.and_then(|i| i.low)),
            number_cell(m.unweighted_ci.and_then(|i| i.high)),
            number_cell(Some(m.weighted_mean)),
            number_cell(m.weighted_ci.and_then(|i| i.low)),
            number_cell(m.weighted_ci.and_then(|i| i.high)),
        ]));
    }
    s
}

/// One row per term: the verdict across engines.
pub fn concordance_table(a: &Analysis) -> String {
    let mut s =
        row(&["term", "verdict", "agreeing", "dissenting", "undetermined", "not_applicable", "primary"]
            .map(String::from));
    for c in &a.concordance {
        let verdict = match c.verdict {
            Verdict::Holds => "holds",
            Verdict::NullHolds => "null-holds",
            Verdict::MethodDependent => "method-dependent",
            Verdict::Undetermined => "undetermined",
        };
        s.push_str(&row(&[
            text_cell(&c.term),
            verdict.to_string(),
            text_cell(&c.agreeing.join(" ")),
            text_cell(&c.dissenting.join(" ")),
            text_cell(&c.undetermined.join(" ")),
            text_cell(&c.not_applicable.join(" ")),
            text_cell(c.primary.as_deref().unwrap_or("")),
        ]));
    }
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn formula_like_text_is_defused_and_quoted() {
        // OWASP CSV-injection guidance: prefix cells starting with = + - @ (and tab, CR).
        assert_eq!(text_cell("=HYPERLINK(\"x\")"), "\"'=HYPERLINK(\"\"x\"\")\"");
        assert_eq!(text_cell("+1"), "'+1");
        assert_eq!(text_cell("-dose"), "'-dose");
        assert_eq!(text_cell("@SUM"), "'@SUM");
        assert_eq!(text_cell("a,b"), "\"a,b\"");
        assert_eq!(text_cell("plain"), "plain");
        assert_eq!(number_cell(Some(-1.5)), "-1.5");
        assert_eq!(number_cell(None), "");
    }
}
