//! Text rendering of the follow-ups: the `followup` section of the `analyze` report and
//! the whole `quorum probe` output (text, or its own JSON object).
//!
//! Kept apart from `text.rs` so that the follow-up tables have one owner; the
//! `analyze` report calls [`followups`] once. Renderers format and never compute.

use super::table::{num, p_value, Align, Table};
use crate::config::Format;
use crate::followup::{slice_name, PlannedContrast, ProbeReport};
use crate::results::{Decision, Effect, Followup};
use std::io::{self, Write};

fn decision(d: Option<Decision>) -> &'static str {
    Decision::word_or(d, "—")
}

/// Degrees of freedom: whole numbers without decimals, others to 4 significant digits.
fn df(x: Option<f64>) -> String {
    match x {
        Some(v) if v.fract() == 0.0 && v.abs() < 1e9 => format!("{v:.0}"),
        other => num(other, 4),
    }
}

fn interval(lo: Option<f64>, hi: Option<f64>) -> String {
    match (lo, hi) {
        (Some(l), Some(h)) => format!("[{}, {}]", num(Some(l), 4), num(Some(h), 4)),
        _ => "—".into(),
    }
}

fn effect(e: &Option<Effect>) -> String {
    match e {
        None => "—".into(),
        Some(e) => {
            let name = match e.name.as_str() {
                "partial_eta_squared" => "partial η²",
                "hedges_g" => "g",
                "robust_d" => "d_R",
                "standardized_contrast" => "g",
                other => other,
            };
            match (e.ci_low, e.ci_high) {
                (Some(_), Some(_)) => format!("{name} {} {}", num(e.value, 3), interval(e.ci_low, e.ci_high)),
                _ => format!("{name} {}", num(e.value, 3)),
            }
        }
    }
}

/// The follow-up section of the `analyze` text report (nothing when there are none).
///
/// # Errors
/// Only I/O errors of `out`.
pub fn followups(list: &[Followup], out: &mut dyn Write) -> io::Result<()> {
    if list.is_empty() {
        return Ok(());
    }
    writeln!(out, "Follow-ups (METHODS §9) of the terms whose verdict is holds or method-dependent")?;
    writeln!(out)?;
    for f in list {
        followup(f, out)?;
    }
    Ok(())
}

/// One follow-up: simple-effect tests, then pairwise comparisons per slice.
///
/// # Errors
/// Only I/O errors of `out`.
pub fn followup(f: &Followup, out: &mut dyn Write) -> io::Result<()> {
    if f.at.is_empty() {
        writeln!(
            out,
            "Pairwise comparisons of the marginal means of {} ({}; adjustment: {})",
            f.effect, f.origin, f.adjustment
        )?;
    } else {
        writeln!(
            out,
            "Simple effects of {} at each level of {} ({}; adjustment: {})",
            f.effect,
            f.at.join(" × "),
            f.origin,
            f.adjustment
        )?;
    }
    if !f.tests.is_empty() {
        let mut t = Table::new(&[
            ("slice", Align::Left),
            ("method", Align::Left),
            ("F", Align::Right),
            ("df", Align::Left),
            ("p", Align::Right),
            ("p adj", Align::Right),
            ("decision", Align::Left),
            ("effect", Align::Left),
        ]);
        for r in &f.tests {
            let dfs = match (r.df1, r.df2) {
                (Some(a), Some(b)) => format!("{}, {}", df(Some(a)), df(Some(b))),
                _ => "—".into(),
            };
            let mut p = p_value(r.p);
            if let Some(mc) = &r.mc {
                if mc.exact {
                    p.push_str(" (exact)");
                } else {
                    p.push_str(&format!(" (B={})", mc.resamples));
                }
            }
            if let Some(reason) = &r.not_applicable {
                t.row(vec![slice_name(&r.slice), r.method.clone(), format!("not applicable: {reason}")]);
                continue;
            }
            t.row(vec![
                slice_name(&r.slice),
                r.method.clone(),
                num(r.statistic, 4),
                dfs,
                p,
                p_value(r.p_adjusted),
                decision(r.decision).into(),
                effect(&r.effect),
            ]);
        }
        writeln!(out, "{}", t.render(2))?;
    }
    // Pairwise, one table per slice.
    let mut slices: Vec<&Vec<crate::results::SliceLevel>> = Vec::new();
    for r in &f.pairwise {
        if !slices.contains(&&r.slice) {
            slices.push(&r.slice);
        }
    }
    for s in slices {
        writeln!(out, "  Pairwise comparisons of {}, {}", f.effect, slice_name(s))?;
        let mut t = Table::new(&[
            ("method", Align::Left),
            ("comparison", Align::Left),
            ("difference", Align::Right),
            ("interval", Align::Left),
            ("statistic", Align::Left),
            ("df", Align::Right),
            ("p", Align::Right),
            ("p adj", Align::Right),
            ("decision", Align::Left),
            ("effect", Align::Left),
        ]);
        for r in f.pairwise.iter().filter(|r| &r.slice == s) {
            let pair = format!("{} − {}", r.first.join(":"), r.second.join(":"));
            if let Some(reason) = &r.not_applicable {
                t.row(vec![r.method.clone(), pair, format!("not applicable: {reason}")]);
                continue;
            }
            let scale = if r.scale == "means" { String::new() } else { format!(" ({})", r.scale) };
            t.row(vec![
                format!("{}{scale}", r.method),
                pair,
                num(r.estimate, 4),
                interval(r.ci_low, r.ci_high),
                format!("{} = {}", r.statistic_name, num(r.statistic, 4)),
                df(r.df),
                p_value(r.p),
                p_value(r.p_adjusted),
                decision(r.decision).into(),
                effect(&r.effect),
            ]);
        }
        writeln!(out, "{}", t.render(4))?;
    }
    for n in &f.notes {
        writeln!(out, "  Note: {n}")?;
    }
    writeln!(out)
}

fn contrasts(list: &[PlannedContrast], out: &mut dyn Write) -> io::Result<()> {
    if list.is_empty() {
        return Ok(());
    }
    writeln!(out, "Planned and trend contrasts of marginal means (unweighted over the other factors)")?;
    let mut t = Table::new(&[
        ("contrast", Align::Left),
        ("method", Align::Left),
        ("estimate", Align::Right),
        ("interval", Align::Left),
        ("t", Align::Right),
        ("df", Align::Right),
        ("p", Align::Right),
        ("p adj", Align::Right),
        ("decision", Align::Left),
        ("effect", Align::Left),
    ]);
    for c in list {
        for r in &c.tests {
            if let Some(reason) = &r.not_applicable {
                t.row(vec![c.name.clone(), r.method.clone(), format!("not applicable: {reason}")]);
                continue;
            }
            t.row(vec![
                c.name.clone(),
                r.method.clone(),
                num(r.estimate, 4),
                interval(r.ci_low, r.ci_high),
                num(r.statistic, 4),
                df(r.df),
                p_value(r.p),
                p_value(r.p_adjusted),
                decision(r.decision).into(),
                effect(&r.effect),
            ]);
        }
    }
    writeln!(out, "{}", t.render(2))?;
    for c in list.iter().filter(|c| c.kind == "trend") {
        let w: Vec<String> = c.weights.iter().map(|w| num(Some(*w), 4)).collect();
        writeln!(out, "  {} weights over {}: {}", c.name, c.levels.join(", "), w.join(", "))?;
    }
    writeln!(out)
}

/// The whole `quorum probe` output in `format` (text; anything else is its JSON object).
///
/// # Errors
/// Only I/O errors of `out`.
pub fn render_probe(r: &ProbeReport, format: Format, out: &mut dyn Write) -> io::Result<()> {
    if format != Format::Text {
        serde_json::to_writer_pretty(&mut *out, r).map_err(io::Error::other)?;
        return writeln!(out);
    }
    let names: Vec<&str> = r.factors.iter().map(|f| f.name.as_str()).collect();
    writeln!(out, "quorum {} probe · outcome `{}` by {}", r.reproducibility.version, r.outcome, names.join(" × "))?;
    writeln!(out, "Data      {}: {} rows read, {} used", r.input.path, r.input.rows_read, r.input.rows_used)?;
    for f in &r.factors {
        writeln!(out, "Factor    {}: {}", f.name, f.levels.join(" < "))?;
    }
    let s = &r.settings;
    writeln!(
        out,
        "Settings  α = {}, intervals {}%, trimming {}%, {}, adjustment {}, {} permutations (up to {})",
        s.alpha,
        (s.ci_level * 100.0).round(),
        (s.trim * 100.0).round(),
        s.hc,
        s.adjustment,
        s.permutations,
        s.max_permutations
    )?;
    writeln!(out)?;
    let mut t = Table::new(&[
        ("cell", Align::Left),
        ("n", Align::Right),
        ("mean", Align::Right),
        ("sd", Align::Right),
        ("trimmed", Align::Right),
    ]);
    for c in &r.cells {
        t.row(vec![
            c.levels.join(", "),
            c.n.to_string(),
            num(Some(c.mean), 4),
            num(c.sd, 4),
            num(Some(c.trimmed_mean), 4),
        ]);
    }
    writeln!(out, "Cells")?;
    writeln!(out, "{}", t.render(2))?;
    writeln!(out)?;
    for f in &r.followup {
        followup(f, out)?;
    }
    contrasts(&r.contrasts, out)?;
    let rep = &r.reproducibility;
    writeln!(out, "Reproduce: quorum {} · seed {} · {} thread(s) · {}", rep.version, rep.seed, rep.threads, rep.command)
}
