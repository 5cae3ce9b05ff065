//! The text report for people at a terminal: compact aligned tables, in the order a
//! reader needs them (data and design, diagnostics, the concordance, effect sizes, the
//! far-out variant, follow-ups, text for the paper, cautions), then engine-by-engine
//! details in the full report. The sections themselves are built in `sections.rs` and
//! shared with the Markdown report; this file holds the text renderers and the
//! engine-specific detail sections (one per engine kind).

use super::doc::TextStyle;
use super::table::{num, p_value, Align, Table};
use super::{Detail, Render};
use crate::results::{
    Analysis, ArtDetails, BootstrapDetails, Decision, Details, EngineResult, IntervalFamily, RankAtsDetails,
    WelchJamesRow,
};
use std::io::{self, Write};

/// The full plain-text report (summary sections and every engine's details, no
/// colour): what `report.txt` holds.
pub struct Text;

impl Render for Text {
    fn render(&self, a: &Analysis, out: &mut dyn Write) -> io::Result<()> {
        TextReport { colour: false, detail: Detail::Full }.render(a, out)
    }
}

/// The text report with its options: colour (only on a terminal without `NO_COLOR`;
/// the binary decides) and how much detail.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct TextReport {
    /// Emit ANSI colour and bold.
    pub colour: bool,
    /// Summary sections only, or with every engine's details.
    pub detail: Detail,
}

/// Width the text report wraps its paragraphs at.
pub const WIDTH: usize = 118;

impl Render for TextReport {
    fn render(&self, a: &Analysis, out: &mut dyn Write) -> io::Result<()> {
        let blocks = super::sections::build(a, self.detail);
        super::doc::write_text(&blocks, TextStyle { colour: self.colour, width: WIDTH }, out)
    }
}

/// One engine's detail section: its own table (classical ANOVA table, Welch–James
/// quantities, rank details, …), effect sizes, notes and not-applicable reasons.
pub(super) fn engine(e: &EngineResult, out: &mut dyn Write) -> io::Result<()> {
    match &e.details {
        Some(Details::Classical { anova, .. }) => {
            writeln!(out, "Classical ANOVA (Type {} sums of squares, sum-to-zero coding)", roman(anova.ss_type))?;
            let mut t = Table::new(&[
                ("source", Align::Left),
                ("SS", Align::Right),
                ("df", Align::Right),
                ("MS", Align::Right),
                ("F", Align::Right),
                ("p", Align::Right),
            ]);
            for r in &anova.rows {
                t.row(vec![
                    r.source.clone(),
                    num(Some(r.ss), 5),
                    r.df.to_string(),
                    num(r.ms, 5),
                    num(r.f, 4),
                    p_value(r.p),
                ]);
            }
            writeln!(out, "{}", t.render(2))?;
        }
        Some(Details::Trimmed { trim, reference, terms, .. }) => trimmed_tests(e, *trim, reference, terms, out)?,
        Some(Details::Art(d)) => {
            generic_tests(e, out)?;
            rank_effects(e, out)?;
            art_details(d, out)?;
        }
        Some(Details::RankAts(d)) => {
            generic_tests(e, out)?;
            rank_effects(e, out)?;
            ats_details(d, out)?;
        }
        Some(Details::Bootstrap(d)) => {
            generic_tests(e, out)?;
            bootstrap_intervals(d, out)?;
        }
        _ => generic_tests(e, out)?,
    }
    let mut t = Table::new(&[
        ("term", Align::Left),
        ("partial η²", Align::Right),
        ("CI", Align::Left),
        ("partial ω²", Align::Right),
        ("η²", Align::Right),
        ("ω²", Align::Right),
    ]);
    let mut any = false;
    for r in &e.terms {
        let get = |name: &str| r.effects.iter().find(|x| x.name == name);
        let Some(pe) = get("partial_eta_squared") else {
            continue;
        };
        any = true;
        let ci = match (pe.ci_low, pe.ci_high, pe.ci_level) {
            (Some(l), Some(h), Some(lv)) => {
                format!("[{}, {}] {}%", num(Some(l), 3), num(Some(h), 3), (lv * 100.0).round())
            }
            _ => "—".into(),
        };
        t.row(vec![
            r.term.clone(),
            num(pe.value, 3),
            ci,
            num(get("partial_omega_squared").and_then(|x| x.value), 3),
            num(get("eta_squared").and_then(|x| x.value), 3),
            num(get("omega_squared").and_then(|x| x.value), 3),
        ]);
    }
    if any {
        writeln!(out, "  Effect sizes (Type III)")?;
        writeln!(out, "{}", t.render(2))?;
    }
    for r in &e.terms {
        if let Some(why) = &r.not_applicable {
            writeln!(out, "  {}: not applicable: {why}", r.term)?;
        }
        for n in &r.notes {
            writeln!(out, "  {}: {n}", r.term)?;
        }
    }
    for n in &e.notes {
        writeln!(out, "  note: {n}")?;
    }
    writeln!(out)
}

/// The per-term tests of any engine: statistic, df, p, decision and Monte Carlo error.
fn generic_tests(e: &EngineResult, out: &mut dyn Write) -> io::Result<()> {
    writeln!(out, "Engine `{}`", e.engine)?;
    let mut t = Table::new(&[
        ("term", Align::Left),
        ("statistic", Align::Right),
        ("df1", Align::Right),
        ("df2", Align::Right),
        ("p", Align::Right),
        ("decision", Align::Left),
        ("Monte Carlo", Align::Left),
    ]);
    for r in &e.terms {
        let decision = Decision::word_or(r.decision, "—");
        let mc = match &r.mc {
            Some(m) if m.exact => format!("exact, {} rearrangements", m.resamples),
            Some(m) => format!("B = {}, 99% CI [{}, {}]", m.resamples, num(Some(m.ci_low), 3), num(Some(m.ci_high), 3)),
            None => String::new(),
        };
        t.row(vec![
            r.term.clone(),
            num(r.statistic, 4),
            num(r.df1, 4),
            num(r.df2, 4),
            p_value(r.p),
            decision.into(),
            mc,
        ]);
    }
    writeln!(out, "{}", t.render(2))
}

/// The headline effect of each term of a rank-based engine (named, since its scale differs).
fn rank_effects(e: &EngineResult, out: &mut dyn Write) -> io::Result<()> {
    let mut t = Table::new(&[("term", Align::Left), ("effect", Align::Left), ("value", Align::Right)]);
    let mut any = false;
    for r in &e.terms {
        if let Some(eff) = &r.effect {
            any = true;
            t.row(vec![r.term.clone(), eff.name.replace('_', " "), num(eff.value, 3)]);
        }
    }
    if any {
        writeln!(out, "  Effects")?;
        writeln!(out, "{}", t.render(2))?;
    }
    Ok(())
}

fn art_details(d: &ArtDetails, out: &mut dyn Write) -> io::Result<()> {
    let other = d.checks.iter().map(|c| c.max_other_ss_share).fold(0.0, f64::max);
    let own = d.checks.iter().map(|c| c.target_ss_error_share).fold(0.0, f64::max);
    writeln!(
        out,
        "  Alignment check passed: other terms' SS on the aligned responses ≤ {} of SST, own SS off by ≤ {} of SST (bound {})",
        num(Some(other), 2),
        num(Some(own), 2),
        num(Some(d.checks.first().map(|c| c.bound).unwrap_or(0.0)), 2)
    )?;
    writeln!(
        out,
        "  Outcome ties: {} distinct values among {}, {}% of observations tied",
        d.outcome_ties.distinct,
        d.outcome_ties.n,
        num(Some(100.0 * d.outcome_ties.tied_share), 3)
    )
}

fn ats_details(d: &RankAtsDetails, out: &mut dyn Write) -> io::Result<()> {
    writeln!(out, "  Relative effects ({}; against {})", d.ranks, d.reference)?;
    let mut t = Table::new(&[("cell", Align::Left), ("n", Align::Right), ("relative effect", Align::Right)]);
    for r in &d.relative_effects {
        t.row(vec![r.levels.join(", "), r.n.to_string(), num(r.value, 3)]);
    }
    writeln!(out, "{}", t.render(4))
}

fn roman(ss_type: u8) -> &'static str {
    match ss_type {
        1 => "I",
        2 => "II",
        _ => "III",
    }
}

/// The trimmed engine's Welch–James table: every reference distribution side by side,
/// the one behind the decision named in the title, and d_R for 1-df terms.
fn trimmed_tests(
    e: &EngineResult,
    trim: f64,
    reference: &str,
    rows: &[WelchJamesRow],
    out: &mut dyn Write,
) -> io::Result<()> {
    let used = match reference {
        "adjusted" => "adjusted χ² critical value",
        "bootstrap" => "bootstrap critical value",
        _ => "F approximation",
    };
    // Percent with up to 6 significant decimals: 0.2 → "20", 0.125 → "12.5".
    let percent = (trim * 100.0 * 1e6).round() / 1e6;
    writeln!(out, "Trimmed means ({percent}% trimming), Johansen's Welch–James test; decisions from the {used}")?;
    let boot = rows.iter().any(|r| r.p_bootstrap.is_some());
    let mut cols = vec![
        ("term", Align::Left),
        ("Q", Align::Right),
        ("c_J", Align::Right),
        ("F_WJ", Align::Right),
        ("df1", Align::Right),
        ("ν₂", Align::Right),
        ("p (F)", Align::Right),
        ("p (adj. χ²)", Align::Right),
    ];
    if boot {
        cols.push(("p (bootstrap)", Align::Right));
    }
    cols.extend([("decision", Align::Left), ("robust d", Align::Right)]);
    let mut t = Table::new(&cols);
    for r in &e.terms {
        let w = rows.iter().find(|w| w.term == r.term);
        let get = |f: fn(&WelchJamesRow) -> Option<f64>| w.and_then(f);
        let decision = Decision::word_or(r.decision, "—");
        let mut row = vec![
            r.term.clone(),
            num(get(|w| w.q_stat), 4),
            num(get(|w| w.c_j), 4),
            num(get(|w| w.f), 4),
            num(get(|w| w.df1), 3),
            num(get(|w| w.df2), 4),
            p_value(get(|w| w.p_f)),
            p_value(get(|w| w.p_adjusted)),
        ];
        if boot {
            let mc = match &r.mc {
                Some(m) => format!(" (B = {})", m.resamples),
                None => String::new(),
            };
            row.push(format!("{}{mc}", p_value(get(|w| w.p_bootstrap))));
        }
        let d = r.effects.iter().find(|x| x.name == "robust_d").and_then(|x| x.value);
        row.extend([decision.to_string(), num(d, 3)]);
        t.row(row);
    }
    writeln!(out, "{}", t.render(2))
}

/// The bootstrap engine's intervals, one row per estimate: BCa (percentile where BCa is
/// undefined, marked `*`), the larger Monte Carlo SE of the two ends, and the percentile
/// interval; at most [`INTERVAL_ROWS_PER_FAMILY`] rows per family (the JSON has all).
fn bootstrap_intervals(d: &BootstrapDetails, out: &mut dyn Write) -> io::Result<()> {
    if d.intervals.is_empty() {
        for o in &d.omitted {
            writeln!(out, "  bootstrap intervals omitted: {o}")?;
        }
        return Ok(());
    }
    let level = (d.ci_level * 100.0 * 1e6).round() / 1e6;
    writeln!(
        out,
        "  Bootstrap intervals ({} stratified resamples within cells, {level}% BCa; * percentile where BCa is undefined; ±MC: larger Monte Carlo SE of the two ends; descriptive, not tests)",
        d.resamples
    )?;
    let mut t = Table::new(&[
        ("estimate", Align::Left),
        ("of", Align::Left),
        ("value", Align::Right),
        ("interval", Align::Left),
        ("±MC", Align::Right),
        ("percentile", Align::Left),
        ("flags", Align::Left),
    ]);
    let family_name = |f: IntervalFamily| match f {
        IntervalFamily::CellMean => "cell mean",
        IntervalFamily::CellTrimmedMean => "cell trimmed mean",
        IntervalFamily::MarginalMeanUnweighted => "marginal mean, unweighted",
        IntervalFamily::MarginalMeanWeighted => "marginal mean, weighted",
        IntervalFamily::LevelDifference => "level difference",
        IntervalFamily::InteractionContrast => "interaction contrast",
        IntervalFamily::PartialEtaSquared => "partial η²",
        IntervalFamily::PartialOmegaSquared => "partial ω²",
        IntervalFamily::RobustD => "robust d",
    };
    let pair = |lo: Option<f64>, hi: Option<f64>| match (lo, hi) {
        (Some(l), Some(h)) => format!("[{}, {}]", num(Some(l), 4), num(Some(h), 4)),
        _ => "—".to_string(),
    };
    let mut last: Option<IntervalFamily> = None;
    let mut shown = 0usize;
    let mut hidden = 0usize;
    for r in &d.intervals {
        if last != Some(r.family) {
            if hidden > 0 {
                t.row(vec![
                    String::new(),
                    format!("… {hidden} more (see the JSON)"),
                    String::new(),
                    String::new(),
                    String::new(),
                    String::new(),
                    String::new(),
                ]);
            }
            last = Some(r.family);
            shown = 0;
            hidden = 0;
        }
        if shown >= INTERVAL_ROWS_PER_FAMILY {
            hidden += 1;
            continue;
        }
        let (ends, mark) = match (&r.bca, &r.percentile) {
            (Some(b), _) => (Some(b), ""),
            (None, Some(p)) => (Some(p), "*"),
            (None, None) => (None, ""),
        };
        let interval = ends.map(|e| format!("{}{mark}", pair(e.low, e.high))).unwrap_or_else(|| "—".into());
        let mc = ends.and_then(|e| match (e.low_mc_se, e.high_mc_se) {
            (Some(a), Some(b)) => Some(a.max(b)),
            _ => None,
        });
        let of = match (r.family, &r.term) {
            (IntervalFamily::InteractionContrast, Some(term)) => format!("{term} {}", r.label),
            _ => r.label.clone(),
        };
        t.row(vec![
            if shown == 0 { family_name(r.family).to_string() } else { String::new() },
            of,
            num(r.estimate, 4),
            interval,
            num(mc, 2),
            r.percentile.map(|p| pair(p.low, p.high)).unwrap_or_else(|| "—".into()),
            r.flags.join(" "),
        ]);
        shown += 1;
    }
    if hidden > 0 {
        t.row(vec![
            String::new(),
            format!("… {hidden} more (see the JSON)"),
            String::new(),
            String::new(),
            String::new(),
            String::new(),
            String::new(),
        ]);
    }
    writeln!(out, "{}", t.render(2))?;
    for o in &d.omitted {
        writeln!(out, "  bootstrap intervals omitted: {o}")?;
    }
    Ok(())
}

/// Rows per interval family in the text report.
const INTERVAL_ROWS_PER_FAMILY: usize = 24;
