//! The diagnostics and sensitivity sections of the text report.
//!
//! Kept apart from `text.rs` because these sections are long and change with the
//! diagnostics: shape and normality per cell and of the pooled residuals, spread and
//! balance, the calibrated checks, the flags in plain words, the outlying points by
//! input line, and the short comparison of the main analysis with the sensitivity
//! variant. Everything printed is read from the results; nothing is computed here.

use super::table::{num, p_value, Align, Table};
use crate::results::{Analysis, Concordance, EngineResult, Verdict};
use std::collections::BTreeMap;
use std::io::{self, Write};

/// Outlying points listed before the list is cut (the JSON has them all).
const MAX_OUTLIER_ROWS: usize = 40;

fn pm(value: Option<f64>, se: Option<f64>) -> String {
    match (value, se) {
        (Some(v), Some(s)) => format!("{} ± {}", num(Some(v), 3), num(Some(s), 2)),
        (Some(v), None) => num(Some(v), 3),
        _ => "—".into(),
    }
}

/// A data value with up to 8 significant digits and no trailing zeros.
fn value_text(x: f64) -> String {
    let s = num(Some(x), 8);
    if s.contains('.') && !s.contains('e') {
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        s
    }
}

/// Degrees of freedom: whole numbers without decimals.
fn df(x: f64) -> String {
    if x.fract() == 0.0 && x.abs() < 1e15 {
        format!("{x:.0}")
    } else {
        num(Some(x), 4)
    }
}

/// Counts as whole numbers, other values with 3 significant digits.
fn count_or_num(x: Option<f64>) -> String {
    match x {
        Some(v) if v.fract() == 0.0 && v.abs() < 1e6 => format!("{v:.0}"),
        other => num(other, 3),
    }
}

/// The diagnostics section (describe and analyze).
pub fn diagnostics(a: &Analysis, out: &mut dyn Write) -> io::Result<()> {
    let d = &a.diagnostics;
    writeln!(out, "Shape, normality and outlying points by cell (quartiles: {})", d.quantile_definition)?;
    let mut cols: Vec<(String, Align)> = a.design.factors.iter().map(|f| (f.name.clone(), Align::Left)).collect();
    for (h, al) in [
        ("n", Align::Right),
        ("skew G1 ± SE", Align::Right),
        ("kurt G2 ± SE", Align::Right),
        ("SW W", Align::Right),
        ("SW p", Align::Right),
        ("Q1", Align::Right),
        ("Q3", Align::Right),
        ("MADN", Align::Right),
        ("outside", Align::Right),
        ("far out", Align::Right),
        ("MAD rule", Align::Right),
    ] {
        cols.push((h.to_string(), al));
    }
    let refs: Vec<(&str, Align)> = cols.iter().map(|(h, al)| (h.as_str(), *al)).collect();
    let mut t = Table::new(&refs);
    for (c, dc) in a.design.cells.iter().zip(&d.cells) {
        let mut row = c.levels.clone();
        let (w, p) = match (&c.shapiro_wilk, &dc.shapiro_wilk_not_applicable) {
            (Some(sw), _) => (num(Some(sw.w), 4), p_value(Some(sw.p))),
            (None, Some(_)) => ("n/a".into(), "".into()),
            (None, None) => ("—".into(), "—".into()),
        };
        row.extend([
            c.n.to_string(),
            pm(c.skewness, c.skewness_se),
            pm(c.excess_kurtosis, c.excess_kurtosis_se),
            w,
            p,
            num(dc.q1, 4),
            num(dc.q3, 4),
            num(dc.madn, 3),
            dc.outside.to_string(),
            dc.far_out.to_string(),
            dc.mad_median.map(|k| k.to_string()).unwrap_or_else(|| "n/a".into()),
        ]);
        t.row(row);
    }
    writeln!(out, "{}", t.render(2))?;
    if let Some(r) = &d.residuals {
        let sw = match &d.shapiro_wilk {
            Some(sw) => format!("Shapiro–Wilk W = {}, p = {}", num(Some(sw.w), 4), p_value(Some(sw.p))),
            None => "Shapiro–Wilk not computed".into(),
        };
        writeln!(
            out,
            "  pooled residuals (N = {}): skew G1 {}, kurt G2 {}, {sw}",
            r.n,
            pm(r.skewness, r.skewness_se),
            pm(r.excess_kurtosis, r.excess_kurtosis_se)
        )?;
    }
    writeln!(out)?;

    writeln!(out, "Spread and balance")?;
    let test = |name: &str, t: &Option<crate::results::FTest>| match t {
        Some(t) => {
            format!("{name}: F({}, {}) = {}, p = {}", df(t.df1), df(t.df2), num(Some(t.f), 4), p_value(Some(t.p)))
        }
        None => format!("{name}: not computed"),
    };
    writeln!(
        out,
        "  {}; {}",
        test("Levene (mean-centred)", &d.levene),
        test("Brown–Forsythe (median-centred)", &d.brown_forsythe)
    )?;
    writeln!(
        out,
        "  largest/smallest cell variance {} (robust, MADN²: {}); largest/smallest cell size {}; Spearman correlation of cell size with variance {}",
        num(d.variance_ratio, 3),
        num(d.robust_variance_ratio, 3),
        num(Some(d.n_ratio), 3),
        num(d.n_variance_spearman, 2)
    )?;
    writeln!(out)?;

    if let Some(cal) = &d.calibration {
        writeln!(out, "Calibrated checks (each against {}; a flag needs p ≤ {})", cal.against(), cal.level)?;
        let mut t = Table::new(&[
            ("statistic", Align::Left),
            ("observed", Align::Right),
            ("normal data: median", Align::Right),
            ("mean", Align::Right),
            ("p", Align::Right),
            ("flag", Align::Left),
        ]);
        for c in &cal.checks {
            t.row(vec![
                c.description.clone(),
                count_or_num(c.value),
                count_or_num(c.null_median),
                num(c.null_mean, 3),
                num(c.null_p, 3),
                if c.flagged { "yes".into() } else { "".into() },
            ]);
        }
        writeln!(out, "{}", t.render(2))?;
        writeln!(out)?;
    }

    writeln!(out, "Flags")?;
    if d.flags.is_empty() {
        writeln!(out, "  none: nothing here is beyond what normal, equal-variance data with these cell sizes produce")?;
    }
    for f in &d.flags {
        writeln!(out, "  ! {}  [{}]", f.message, f.code)?;
    }
    writeln!(out)?;

    if !d.outliers.is_empty() {
        writeln!(
            out,
            "Outlying points (information: single points decide nothing; outside = beyond 1.5 × IQR, far out = beyond 3 × IQR, MAD rule = more than 2.24 MADN from the median)"
        )?;
        let mut by_line: BTreeMap<(u64, String), (f64, Vec<&str>)> = BTreeMap::new();
        for o in &d.outliers {
            let rule = match o.rule.as_str() {
                "tukey-1.5" => "outside",
                "tukey-3" => "far out",
                "mad-median" => "MAD rule",
                other => other,
            };
            by_line.entry((o.line, o.cell.clone())).or_insert((o.value, Vec::new())).1.push(rule);
        }
        let mut t = Table::new(&[
            ("line", Align::Right),
            ("cell", Align::Left),
            ("value", Align::Right),
            ("rules", Align::Left),
        ]);
        for ((line, cell), (value, rules)) in by_line.iter().take(MAX_OUTLIER_ROWS) {
            t.row(vec![line.to_string(), cell.clone(), value_text(*value), rules.join(", ")]);
        }
        writeln!(out, "{}", t.render(2))?;
        if by_line.len() > MAX_OUTLIER_ROWS {
            writeln!(out, "  … and {} more points (all are in the JSON results)", by_line.len() - MAX_OUTLIER_ROWS)?;
        }
        writeln!(out)?;
    }
    for n in &d.notes {
        writeln!(out, "  note: {n}")?;
    }
    writeln!(out)
}

fn verdict_word(v: Verdict) -> &'static str {
    match v {
        Verdict::Holds => "holds",
        Verdict::NullHolds => "null holds",
        Verdict::MethodDependent => "method-dependent",
        Verdict::Undetermined => "undetermined",
    }
}

fn p_of(engines: &[EngineResult], engine: &str, term: &str) -> Option<f64> {
    engines.iter().find(|e| e.engine == engine)?.terms.iter().find(|t| t.term == term)?.p
}

fn verdict_of(conc: &[Concordance], term: &str) -> String {
    conc.iter().find(|c| c.term == term).map(|c| verdict_word(c.verdict).to_string()).unwrap_or_else(|| "—".into())
}

/// The sensitivity section (analyze only).
pub fn sensitivity(a: &Analysis, out: &mut dyn Write) -> io::Result<()> {
    for s in &a.sensitivity {
        writeln!(out, "Sensitivity variant `{}` (descriptive p-values; the input file is unchanged)", s.variant)?;
        writeln!(out, "  rule `{}`: {}", s.rule, s.description)?;
        let removed = if s.rows_removed.is_empty() {
            "no rows removed".to_string()
        } else {
            format!(
                "removed {} row(s): {}",
                s.rows_removed.len(),
                crate::diagnostics::flags::lines_phrase(&s.rows_removed)
            )
        };
        writeln!(out, "  {removed}")?;
        let mut t = Table::new(&[
            ("term", Align::Left),
            ("verdict", Align::Left),
            ("without the points", Align::Left),
            ("p: all rows → without the points", Align::Left),
        ]);
        for c in &a.concordance {
            let ps: Vec<String> = s
                .engines
                .iter()
                .map(|e| {
                    let before = p_of(&a.engines, &e.engine, &c.term);
                    let after = p_of(&s.engines, &e.engine, &c.term);
                    format!("{} {} → {}", e.engine, p_value(before), p_value(after))
                })
                .collect();
            t.row(vec![
                c.term.clone(),
                verdict_word(c.verdict).into(),
                verdict_of(&s.concordance, &c.term),
                ps.join("; "),
            ]);
        }
        writeln!(out, "{}", t.render(2))?;
        for e in &s.engines {
            for r in &e.terms {
                let was_applicable = a
                    .engines
                    .iter()
                    .find(|m| m.engine == e.engine)
                    .and_then(|m| m.terms.iter().find(|x| x.term == r.term))
                    .is_some_and(|x| x.not_applicable.is_none());
                if let (Some(why), true) = (&r.not_applicable, was_applicable) {
                    writeln!(out, "  {} on {}: not applicable without the points: {why}", e.engine, r.term)?;
                }
            }
        }
        for n in &s.notes {
            writeln!(out, "  note: {n}")?;
        }
        writeln!(out)?;
    }
    Ok(())
}
