//! The report's sections, in the order a reader needs them: data and design,
//! diagnostics, the concordance table (terms × engines, with the primary engine
//! marked), effect sizes with intervals, the far-out variant, follow-ups, text for the
//! paper, cautions, and how to reproduce the run. Engine-by-engine details (every
//! engine's own table, the diagnostics by cell, the calibrated checks, every outlying
//! point) come after, in the full report only ([`Detail::Full`]): report.txt, report.md
//! and `--details`.
//!
//! Sections are built as [`Block`]s, so the text and Markdown reports are the same
//! document. Everything is read from the [`Analysis`]; nothing is computed here.

use super::apa;
use super::doc::{Block, DocTable, Inline, Style};
use super::table::{num, Align};
use super::{paper, Detail};
use crate::concordance::{primary, profile};
use crate::results::{Analysis, Concordance, Decision, Details, Interval, Verdict};

/// The whole report as blocks.
pub fn build(a: &Analysis, detail: Detail) -> Vec<Block> {
    let mut b = vec![title(a)];
    data_and_design(a, &mut b);
    let describe = a.engines.is_empty() && a.concordance.is_empty();
    if describe {
        b.push(Block::Heading("Diagnostics".into()));
        b.push(Block::Pre(super::capture(|out| super::diagnostics_text::diagnostics(a, out))));
    } else {
        diagnostics(a, &mut b);
        concordance(a, &mut b);
        effects(a, &mut b);
        sensitivity(a, &mut b);
        followups(a, &mut b);
        if let Some(c) = &a.calibration {
            b.push(Block::Heading("Calibration on data like these".into()));
            b.push(Block::Pre(super::capture(|out| crate::plan::text::calibration_section(c, out))));
        }
        for_the_paper(a, &mut b);
    }
    cautions(a, &mut b);
    reproduce(a, &mut b);
    if !describe {
        match detail {
            Detail::Full => details(a, &mut b),
            Detail::Summary => b.push(Block::Para(Inline::new().add(
                Style::Muted,
                "Engine-by-engine details (each engine's table, diagnostics by cell, calibrated checks, every outlying point): --details, or report.txt, report.md and results.json in a --report folder.",
            ))),
        }
    }
    b
}

fn title(a: &Analysis) -> Block {
    let d = &a.design;
    let names: Vec<&str> = d.factors.iter().map(|f| f.name.as_str()).collect();
    Block::Title(Inline::plain(format!(
        "quorum {} · {} by {}",
        a.reproducibility.version,
        d.outcome,
        names.join(" × ")
    )))
}

/// `[low, high]` at `sig` significant digits, `—` without an interval.
pub(crate) fn interval(i: &Option<Interval>, sig: usize) -> String {
    match i {
        Some(i) => format!("[{}, {}]", num(i.low, sig), num(i.high, sig)),
        None => "—".into(),
    }
}

/// The numbers of one row of the cells table, in column order (after the levels).
pub(crate) fn cell_numbers(c: &crate::results::CellSummary) -> [String; 11] {
    [
        c.n.to_string(),
        num(Some(c.mean), 4),
        interval(&c.mean_ci, 4),
        num(c.sd, 3),
        num(Some(c.median), 4),
        num(Some(c.trimmed_mean), 4),
        num(c.winsorized_sd, 3),
        num(c.skewness, 2),
        num(c.excess_kurtosis, 2),
        num(Some(c.min), 4),
        num(Some(c.max), 4),
    ]
}

fn data_and_design(a: &Analysis, b: &mut Vec<Block>) {
    let d = &a.design;
    b.push(Block::Heading("Data and design".into()));
    let mut lines = Vec::new();
    let mut data = format!("data     {}: {} rows read, {} used", a.input.path, a.input.rows_read, a.input.rows_used);
    if !a.input.dropped.is_empty() {
        let ls: Vec<u64> = a.input.dropped.iter().map(|x| x.line).collect();
        data.push_str(&format!(
            ", {} dropped for missing values ({})",
            a.input.dropped.len(),
            crate::diagnostics::flags::lines_phrase(&ls)
        ));
    }
    lines.push(Inline::plain(data));
    for f in &d.factors {
        let kind = if f.measured { ", measured" } else { "" };
        lines.push(Inline::plain(format!(
            "factor   {} ({} levels{kind}): {}",
            f.name,
            f.levels.len(),
            f.levels.join(" < ")
        )));
    }
    let ns: Vec<usize> = d.cells.iter().map(|c| c.n).collect();
    let (lo, hi) = (ns.iter().min().copied().unwrap_or(0), ns.iter().max().copied().unwrap_or(0));
    let balance =
        if d.balanced { format!("balanced, n = {lo} per cell") } else { format!("unbalanced, n from {lo} to {hi}") };
    let hypothesis =
        if a.engines.is_empty() { "" } else { "; every engine tests each term's Type III (sum-to-zero) hypothesis" };
    lines.push(Inline::plain(format!("cells    {} ({balance}){hypothesis}", d.cells.len())));
    b.push(Block::Lines(lines));

    let Some(first) = d.cells.first() else { return };
    let level = first.mean_ci.map(|i| i.level).unwrap_or(0.95);
    b.push(Block::Subheading(Inline::plain(format!(
        "Cells (mean CI: {} t interval from the cell's own sd; trimmed mean and winsorized sd at {})",
        apa::level_words(level),
        profile::percent(first.trim)
    ))));
    let mut cols: Vec<(String, Align)> = d.factors.iter().map(|f| (f.name.clone(), Align::Left)).collect();
    for (h, al) in [
        ("n", Align::Right),
        ("mean", Align::Right),
        ("mean CI", Align::Left),
        ("sd", Align::Right),
        ("median", Align::Right),
        ("trimmed", Align::Right),
        ("wins.sd", Align::Right),
        ("skew G1", Align::Right),
        ("kurt G2", Align::Right),
        ("min", Align::Right),
        ("max", Align::Right),
    ] {
        cols.push((h.to_string(), al));
    }
    let mut t = DocTable { columns: cols, rows: Vec::new() };
    for c in &d.cells {
        let mut row: Vec<Inline> = c.levels.iter().map(|l| Inline::plain(l.clone())).collect();
        for s in cell_numbers(c) {
            row.push(Inline::plain(s));
        }
        t.row(row);
    }
    b.push(Block::Table(t));

    if let Some(m0) = d.marginal_means.first() {
        let level = m0.unweighted_ci.or(m0.weighted_ci).map(|i| i.level).unwrap_or(0.95);
        b.push(Block::Subheading(Inline::plain(format!(
            "Marginal means (unweighted = mean of cell means, the Type III target; weighted = mean of observations; {} t CI)",
            apa::level_words(level)
        ))));
        let mut t = DocTable::new(&[
            ("factor", Align::Left),
            ("level", Align::Left),
            ("n", Align::Right),
            ("unweighted", Align::Right),
            ("CI", Align::Left),
            ("weighted", Align::Right),
            ("CI", Align::Left),
        ]);
        for r in &d.marginal_means {
            t.row(
                [
                    r.factor.clone(),
                    r.level.clone(),
                    r.n.to_string(),
                    num(Some(r.unweighted_mean), 4),
                    interval(&r.unweighted_ci, 4),
                    num(Some(r.weighted_mean), 4),
                    interval(&r.weighted_ci, 4),
                ]
                .into_iter()
                .map(Inline::plain)
                .collect(),
            );
        }
        b.push(Block::Table(t));
    }
}

fn diagnostics(a: &Analysis, b: &mut Vec<Block>) {
    let d = &a.diagnostics;
    let against = d.calibration.as_ref().map(|c| c.against()).unwrap_or_else(|| "nothing (no calibration)".into());
    b.push(Block::Heading("Diagnostics".into()));
    b.push(Block::Para(Inline::new().add(Style::Muted, format!("flags compare each statistic with {against}"))));
    if d.flags.is_empty() {
        b.push(Block::Lines(vec![Inline::plain(
            "no flag: nothing here is beyond what normal, equal-variance data with these cell sizes produce",
        )]));
    } else {
        b.push(Block::Bullets(
            d.flags
                .iter()
                .map(|f| Inline::new().add(Style::Warn, f.message.clone()).add(Style::Muted, format!(" [{}]", f.code)))
                .collect(),
        ));
    }
    let mut lines = Vec::new();
    let test = |name: &str, t: &Option<crate::results::FTest>| match t {
        Some(t) => format!(
            "{name} F({}, {}) = {}, {}",
            apa::df(t.df1),
            apa::df(t.df2),
            apa::stat(t.f),
            apa::p_phrase(t.p, 0.05)
        ),
        None => format!("{name} not computed"),
    };
    lines.push(Inline::plain(format!(
        "spread   largest/smallest cell variance {}, cell size {}; {}; {} (information, decides nothing)",
        num(d.variance_ratio, 3),
        num(Some(d.n_ratio), 3),
        test("Levene", &d.levene),
        test("Brown–Forsythe", &d.brown_forsythe)
    )));
    if let (Some(r), Some(sw)) = (&d.residuals, &d.shapiro_wilk) {
        lines.push(Inline::plain(format!(
            "shape    pooled residuals: skewness G1 {}, excess kurtosis G2 {}; Shapiro–Wilk W = {}, {} (information)",
            num(r.skewness, 3),
            num(r.excess_kurtosis, 3),
            num(Some(sw.w), 4),
            apa::p_phrase(sw.p, 0.05)
        )));
    }
    let far: Vec<String> = d
        .outliers
        .iter()
        .filter(|o| o.rule == "tukey-3")
        .map(|o| format!("line {} ({}: {})", o.line, o.cell, value_text(o.value)))
        .collect();
    if !far.is_empty() {
        lines.push(Inline::plain(format!("far out  beyond 3 × IQR: {}", far.join("; "))));
    }
    b.push(Block::Lines(lines));
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

fn decision_mark(d: Option<Decision>) -> &'static str {
    match d {
        Some(Decision::Reject) => "●",
        Some(Decision::Retain) => "○",
        Some(Decision::Undetermined) => "?",
        None => "",
    }
}

/// The verdict cell: word, rejecting/deciding engines, and the borderline (`≈α`) and
/// direction-conflict (`⇄`) markers.
fn verdict_cell(c: &Concordance) -> Inline {
    let m = c.rejecting.len() + c.retaining.len();
    let mut l = Inline::new().add(Style::Verdict(c.verdict), Verdict::words(c.verdict));
    if m > 0 {
        l = l.text(format!(" {}/{m}", c.rejecting.len()));
    }
    if c.borderline {
        l = l.add(Style::Warn, " ≈α");
    }
    if c.direction_conflict {
        l = l.add(Style::Warn, " ⇄");
    }
    l
}

/// Engines beyond which the p-range column is left out of the table (it stays in the
/// JSON), so that the table fits 120 columns.
const P_RANGE_MAX_ENGINES: usize = 6;

/// The terms × engines table of one concordance (main analysis or variant).
fn concordance_table(rows: &[Concordance], primary_id: Option<&str>, alpha: f64) -> DocTable {
    let engines: Vec<String> =
        rows.first().map(|r| r.engines.iter().map(|c| c.engine.clone()).collect()).unwrap_or_default();
    let headers: Vec<String> = engines
        .iter()
        .map(|e| {
            let s = profile::short(e);
            if Some(e.as_str()) == primary_id {
                format!("{s}*")
            } else {
                s
            }
        })
        .collect();
    let range = engines.len() <= P_RANGE_MAX_ENGINES;
    let mut columns: Vec<(String, Align)> = vec![("term".into(), Align::Left)];
    columns.extend(headers.into_iter().map(|h| (h, Align::Right)));
    if range {
        columns.push(("p range".into(), Align::Left));
    }
    columns.push(("verdict, rejecting/deciding".into(), Align::Left));
    let mut t = DocTable { columns, rows: Vec::new() };
    for c in rows {
        let mut row = vec![Inline::plain(c.term.clone())];
        for call in &c.engines {
            let text = match (call.decision, call.p) {
                (None, _) => "n/a".to_string(),
                (d, Some(p)) => {
                    format!("{} {}", apa::p_value(p, alpha).replace("< ", "<").replace("> ", ">"), decision_mark(d))
                }
                (d, None) => decision_mark(d).to_string(),
            };
            let style = if Some(call.engine.as_str()) == primary_id { Style::Strong } else { Style::Plain };
            row.push(Inline::new().add(style, text));
        }
        if range {
            let text = match (c.p_min, c.p_max) {
                (Some(lo), Some(hi)) if lo == hi => apa::p_value(lo, alpha),
                (Some(lo), Some(hi)) => format!("{}–{}", apa::p_value(lo, alpha), apa::p_value(hi, alpha)),
                _ => "—".into(),
            };
            row.push(Inline::plain(text.replace("< ", "<").replace("> ", ">")));
        }
        row.push(verdict_cell(c));
        t.row(row);
    }
    t
}

pub(crate) fn concordance(a: &Analysis, b: &mut Vec<Block>) {
    let alpha = paper::alpha(a);
    let primary_id = a.primary_engine.as_ref().and_then(|p| p.engine.as_deref());
    b.push(Block::Heading("Concordance: does each conclusion hold across engines?".into()));
    b.push(Block::Lines(vec![
        Inline::new().add(
            Style::Muted,
            format!(
                "p and decision per engine at α = {}: ● reject  ○ retain  ? undetermined  n/a not applicable  * primary engine",
                apa::alpha(alpha)
            ),
        ),
        Inline::new().add(Style::Muted, "verdict markers: ≈α borderline primary p (within a factor √10 of α)  ⇄ direction conflict"),
    ]));
    b.push(Block::Table(concordance_table(&a.concordance, primary_id, alpha)));
    let families: Vec<String> = a
        .engines
        .iter()
        .map(|e| {
            let short = profile::short(&e.engine);
            let label = if short == e.engine { short } else { format!("{short} ({})", e.engine) };
            format!("{label} = {}", profile::profile(&e.engine).hypothesis)
        })
        .collect();
    if !families.is_empty() {
        b.push(Block::Para(Inline::new().add(Style::Muted, format!("Hypotheses: {}.", families.join("; ")))));
    }
    if let Some(p) = &a.primary_engine {
        let head = match (&p.engine, p.fixed) {
            (Some(id), true) => format!("Primary engine: {} (fixed in advance with --primary)", profile::name(id)),
            (Some(id), false) => format!("Primary engine: {}", profile::name(id)),
            (None, _) => "Primary engine: none".to_string(),
        };
        b.push(Block::Subheading(Inline::plain(head)));
        let mut items = vec![Inline::plain(p.reason.clone())];
        if !p.citations.is_empty() {
            items.push(Inline::plain(format!("sources: {}", p.citations.join("; "))));
        }
        for s in &p.skipped {
            items.push(Inline::plain(format!(
                "rule {} ({}) applied but was passed over: {}",
                s.number,
                primary::rule_words(s.rule),
                s.why
            )));
        }
        for n in &p.notes {
            items.push(Inline::new().add(Style::Muted, n.clone()));
        }
        b.push(Block::Bullets(items));
    }
    let explained: Vec<Inline> = a
        .concordance
        .iter()
        .flat_map(|c| {
            c.explanations.iter().map(move |e| {
                let style = if e.starts_with("Direction conflict") || e.starts_with("Borderline") {
                    Style::Warn
                } else {
                    Style::Plain
                };
                Inline::new().add(Style::Strong, format!("{}: ", c.term)).add(style, e.clone())
            })
        })
        .collect();
    if !explained.is_empty() {
        b.push(Block::Subheading("What goes with the disagreements (associations in these data, not causes)".into()));
        b.push(Block::Bullets(explained));
    }
}

/// Column header of another engine's headline effect (the legend below names the engine).
fn effect_label(engine: &str, name: &str) -> String {
    match name {
        "robust_d" => "robust d".into(),
        "relative_effect_difference" => "Δ rel. effect".into(),
        "partial_eta_squared_aligned_ranks" => "η²p ranks".into(),
        other => format!("{engine} {}", other.replace("partial_eta_squared", "partial η²").replace('_', " ")),
    }
}

fn effects(a: &Analysis, b: &mut Vec<Block>) {
    let classical = a.engines.iter().find(|e| e.engine == "classical");
    // Headline effects of the other engines, one column per (engine, effect).
    let others: Vec<(String, String)> = {
        let mut v: Vec<(String, String)> = Vec::new();
        for e in a.engines.iter().filter(|e| e.engine != "classical") {
            for t in &e.terms {
                if let Some(x) = &t.effect {
                    // A partial η² without an interval repeats the classical column
                    // (the permutation engine reports the same point estimate).
                    let repeats = classical.is_some() && x.name == "partial_eta_squared" && x.ci_low.is_none();
                    if !repeats && !v.iter().any(|(id, n)| id == &e.engine && n == &x.name) {
                        v.push((e.engine.clone(), x.name.clone()));
                    }
                }
            }
        }
        v
    };
    let contrasts = a.concordance.iter().any(|c| c.evidence.as_ref().and_then(|e| e.mean_contrast).is_some());
    if classical.is_none() && others.is_empty() && !contrasts {
        return;
    }
    let level =
        classical.and_then(|e| e.terms.iter().flat_map(|t| t.effects.iter()).find_map(|x| x.ci_level)).unwrap_or(0.95);
    b.push(Block::Heading("Effect sizes".into()));
    b.push(Block::Para(Inline::new().add(
        Style::Muted,
        format!(
            "{} intervals where the engine gives one; partial η² and ω² from the classical ANOVA",
            apa::level_words(level)
        ),
    )));
    let mut cols: Vec<(String, Align)> = vec![("term".into(), Align::Left)];
    if classical.is_some() {
        cols.extend([
            ("partial η²".to_string(), Align::Right),
            ("CI".to_string(), Align::Left),
            ("partial ω²".to_string(), Align::Right),
        ]);
    }
    if contrasts {
        cols.push(("Δ means".into(), Align::Right));
    }
    for (id, name) in &others {
        cols.push((effect_label(id, name), Align::Right));
    }
    let mut t = DocTable { columns: cols, rows: Vec::new() };
    for c in &a.concordance {
        let mut row = vec![Inline::plain(c.term.clone())];
        if let Some(e) = classical {
            let r = e.terms.iter().find(|t| t.term == c.term);
            let get = |n: &str| r.and_then(|r| r.effects.iter().find(|x| x.name == n));
            let pe = get("partial_eta_squared");
            row.push(Inline::plain(num(pe.and_then(|x| x.value), 3)));
            row.push(Inline::plain(match pe.map(|x| (x.ci_low, x.ci_high)) {
                Some((Some(l), Some(h))) => format!("[{}, {}]", num(Some(l), 3), num(Some(h), 3)),
                _ => "—".into(),
            }));
            row.push(Inline::plain(num(get("partial_omega_squared").and_then(|x| x.value), 3)));
        }
        if contrasts {
            row.push(Inline::plain(num(c.evidence.as_ref().and_then(|e| e.mean_contrast), 4)));
        }
        for (id, name) in &others {
            let x = a
                .engines
                .iter()
                .find(|e| &e.engine == id)
                .and_then(|e| e.terms.iter().find(|t| t.term == c.term))
                .and_then(|t| t.effects.iter().find(|x| &x.name == name));
            let text = match x {
                Some(x) => match (x.ci_low, x.ci_high) {
                    (Some(l), Some(h)) => format!("{} [{}, {}]", num(x.value, 3), num(Some(l), 3), num(Some(h), 3)),
                    _ => num(x.value, 3),
                },
                None => "—".into(),
            };
            row.push(Inline::plain(text));
        }
        t.row(row);
    }
    b.push(Block::Table(t));
    let mut notes = Vec::new();
    if contrasts {
        notes.push("Δ means: 1-df terms, unweighted cell means, first level minus last (interactions: difference of differences), outcome units");
    }
    if others.iter().any(|(_, n)| n == "robust_d") {
        notes.push("robust d: trimmed engine, Algina, Keselman & Penfield (2005), first level minus last");
    }
    if others.iter().any(|(_, n)| n == "relative_effect_difference") {
        notes.push("Δ rel. effect: rank-ats, difference of relative effects, first level minus second");
    }
    if others.iter().any(|(_, n)| n == "partial_eta_squared_aligned_ranks") {
        notes.push(
            "η²p ranks: art, partial η² on the aligned-rank scale (not comparable with partial η² of the outcome)",
        );
    }
    if !notes.is_empty() {
        b.push(Block::Para(Inline::new().add(Style::Muted, format!("{}.", notes.join("; ")))));
    }
}

fn sensitivity(a: &Analysis, b: &mut Vec<Block>) {
    let alpha = paper::alpha(a);
    let primary_id = a.primary_engine.as_ref().and_then(|p| p.engine.as_deref());
    for s in &a.sensitivity {
        let name = match s.variant.as_str() {
            "without-far-out-points" => "without far-out points".to_string(),
            "without-mad-median-points" => "without MAD–median points".to_string(),
            other => other.replace('-', " "),
        };
        b.push(Block::Heading(Inline::plain(format!("Sensitivity: {name}"))));
        let mut lines = vec![Inline::plain(format!("rule     `{}`: {}", s.rule, s.description))];
        if s.rows_removed.is_empty() {
            lines.push(Inline::plain("removed  nothing: no point met the rule, so the variant is the main analysis"));
            b.push(Block::Lines(lines));
            continue;
        }
        lines.push(Inline::plain(format!(
            "removed  {} row(s): {} (the input file is unchanged; p-values below are descriptive)",
            s.rows_removed.len(),
            crate::diagnostics::flags::lines_phrase(&s.rows_removed)
        )));
        if let Some(rate) = s.null_removal_rate {
            lines.push(Inline::new().add(
                Style::Muted,
                format!(
                    "null     the rule removes at least one point from {:.1}% of normal, equal-variance datasets with these cell sizes",
                    rate * 100.0
                ),
            ));
        }
        b.push(Block::Lines(lines));
        b.push(Block::Table(concordance_table(&s.concordance, primary_id, alpha)));
        let mut changes = Vec::new();
        for c in &a.concordance {
            let Some(v) = s.concordance.iter().find(|v| v.term == c.term) else { continue };
            if v.verdict != c.verdict {
                changes.push(Inline::plain(format!(
                    "{}: {} with all rows, {} without the points",
                    c.term,
                    Verdict::words(c.verdict),
                    Verdict::words(v.verdict)
                )));
            }
        }
        if changes.is_empty() {
            changes.push(Inline::plain("every verdict is the same without the points"));
        }
        b.push(Block::Bullets(changes));
    }
}

pub(crate) fn followups(a: &Analysis, b: &mut Vec<Block>) {
    if a.followup.is_empty() {
        return;
    }
    b.push(Block::Heading("Follow-ups".into()));
    b.push(Block::Para(Inline::plain(
        "Methods that reject after the adjustment within each family (every test, p and interval: details, results.json).",
    )));
    for f in &a.followup {
        let title = if f.at.is_empty() {
            format!(
                "{}: pairwise differences of its marginal means ({}, {} adjustment)",
                f.effect, f.origin, f.adjustment
            )
        } else {
            format!("{} at each level of {} ({}, {} adjustment)", f.effect, f.at.join(" × "), f.origin, f.adjustment)
        };
        b.push(Block::Subheading(Inline::plain(title)));
        let mut items: Vec<Inline> = Vec::new();
        let slices = group(f.tests.iter().map(|t| (slice_words(&t.slice), t.method.as_str(), t.decision)));
        for (slice, calls) in slices {
            items.push(Inline::plain(format!("simple effect at {slice}: {}", tally(&calls))));
        }
        let pairs = group(f.pairwise.iter().map(|p| {
            let mut what = format!("{} vs {}", p.first.join(" × "), p.second.join(" × "));
            if !p.slice.is_empty() {
                what = format!("{what} at {}", slice_words(&p.slice));
            }
            (what, p.method.as_str(), p.decision)
        }));
        for (pair, calls) in pairs {
            items.push(Inline::plain(format!("{pair}: {}", tally(&calls))));
        }
        if items.is_empty() {
            items.extend(f.notes.iter().map(|n| Inline::new().add(Style::Muted, n.clone())));
        }
        if !items.is_empty() {
            b.push(Block::Bullets(items));
        }
    }
}

/// `B=bark, C=wet`.
fn slice_words(slice: &[crate::results::SliceLevel]) -> String {
    slice.iter().map(|l| format!("{}={}", l.factor, l.level)).collect::<Vec<_>>().join(", ")
}

/// One method's call on a follow-up test: method id and decision.
type Call<'a> = (&'a str, Option<Decision>);

/// Groups (key, method, decision) triples by key, keeping the order of first appearance.
fn group<'a>(items: impl Iterator<Item = (String, &'a str, Option<Decision>)>) -> Vec<(String, Vec<Call<'a>>)> {
    let mut out: Vec<(String, Vec<Call<'a>>)> = Vec::new();
    for (key, method, decision) in items {
        match out.iter_mut().find(|(k, _)| *k == key) {
            Some((_, calls)) => calls.push((method, decision)),
            None => out.push((key, vec![(method, decision)])),
        }
    }
    out
}

/// "2 of 3 methods reject (tukey-kramer, yuen); undecided: art-c".
fn tally(calls: &[Call]) -> String {
    let pick = |d: Decision| calls.iter().filter(|(_, x)| *x == Some(d)).map(|(m, _)| *m).collect::<Vec<_>>();
    let reject = pick(Decision::Reject);
    let retain = pick(Decision::Retain);
    let other: Vec<&str> = calls
        .iter()
        .filter(|(_, x)| !matches!(x, Some(Decision::Reject | Decision::Retain)))
        .map(|(m, _)| *m)
        .collect();
    let decided = reject.len() + retain.len();
    let mut s = if decided == 0 {
        "no method decided".to_string()
    } else if reject.is_empty() {
        format!("0 of {decided} methods reject")
    } else {
        format!("{} of {decided} methods reject ({})", reject.len(), reject.join(", "))
    };
    if !other.is_empty() {
        s.push_str(&format!("; not decided: {}", other.join(", ")));
    }
    s
}

pub(crate) fn for_the_paper(a: &Analysis, b: &mut Vec<Block>) {
    b.push(Block::Heading("For the paper".into()));
    b.push(Block::Subheading("Results".into()));
    for c in &a.concordance {
        b.push(Block::Para(paper::result_sentence(a, c)));
    }
    b.push(Block::Subheading("Methods".into()));
    b.push(Block::Para(paper::methods_paragraph(a)));
}

fn cautions(a: &Analysis, b: &mut Vec<Block>) {
    b.push(Block::Heading("Cautions".into()));
    let mut items: Vec<Inline> = Vec::new();
    if a.concordance.iter().any(|c| c.verdict == Verdict::MethodDependent) {
        items.push(Inline::plain(
            "The engines test different hypotheses (means, trimmed means, ranks): a method-dependent verdict is a finding to report with the primary engine's result, not something to settle by choosing the smallest p.",
        ));
    }
    for c in a.concordance.iter().filter(|c| c.direction_conflict) {
        items.push(Inline::new().add(
            Style::Warn,
            format!("{}: the engines' estimates point in different directions; describe the cells before interpreting a direction.", c.term),
        ));
    }
    if a.sensitivity.iter().any(|s| !s.rows_removed.is_empty()) {
        items.push(Inline::plain(
            "The sensitivity variant's p-values are descriptive: the removed points were chosen after looking at the data.",
        ));
    }
    for e in &a.engines {
        if let Some(Details::Art(d)) = &e.details {
            for f in &d.flags {
                items.push(Inline::plain(format!("art: {}", f.message)));
            }
        }
        let na: Vec<&str> = e.terms.iter().filter(|t| t.not_applicable.is_some()).map(|t| t.term.as_str()).collect();
        if !na.is_empty() {
            let why = e.terms.iter().find_map(|t| t.not_applicable.clone()).unwrap_or_default();
            items.push(Inline::plain(format!("{} was not applicable on {}: {why}", e.engine, na.join(", "))));
        }
    }
    items.push(Inline::plain(
        "A small p is not a large or important effect; robust methods do not rescue a flawed design; decisions about people's health or safety need a qualified statistician and the applicable regulations.",
    ));
    b.push(Block::Bullets(items));
}

fn reproduce(a: &Analysis, b: &mut Vec<Block>) {
    let r = &a.reproducibility;
    b.push(Block::Para(Inline::new().add(
        Style::Muted,
        format!("Reproduce: quorum {} · seed {} · {} thread(s) · {}", r.version, r.seed, r.threads, r.command),
    )));
}

fn details(a: &Analysis, b: &mut Vec<Block>) {
    b.push(Block::Heading("Details".into()));
    b.push(Block::Subheading("Diagnostics by cell, calibrated checks and outlying points".into()));
    b.push(Block::Pre(super::capture(|out| super::diagnostics_text::diagnostics(a, out))));
    for e in &a.engines {
        b.push(Block::Subheading(Inline::plain(format!("Engine `{}`: {}", e.engine, profile::name(&e.engine)))));
        b.push(Block::Pre(super::capture(|out| super::text::engine(e, out))));
    }
    if !a.followup.is_empty() {
        b.push(Block::Subheading("Follow-ups, test by test".into()));
        b.push(Block::Pre(super::capture(|out| super::followup_text::followups(&a.followup, out))));
    }
    if !a.sensitivity.is_empty() {
        b.push(Block::Subheading("Sensitivity variant, engine by engine".into()));
        b.push(Block::Pre(super::capture(|out| super::diagnostics_text::sensitivity(a, out))));
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn tally_counts_the_methods_that_decided() {
        let calls = [("a", Some(Decision::Reject)), ("b", Some(Decision::Retain)), ("c", None)];
        assert_eq!(tally(&calls), "1 of 2 methods reject (a); not decided: c");
        assert_eq!(tally(&calls[1..2]), "0 of 1 methods reject");
        assert_eq!(tally(&[("c", Some(Decision::Undetermined))]), "no method decided; not decided: c");
    }
}
