//! The plan's text report: what was simulated, then type-I errors, power and the other
//! rejection rates as tables with one column per sample size, then flags and notes.
//! It formats the [`PlanReport`] and computes nothing.

use super::result::{Bradley, PlanReport, RateRow};
use super::scenario::RateKind;
use super::Calibration;
use crate::report::table::{num, Align, Table};
use std::io::{self, Write};

fn rate_cell(r: &RateRow) -> String {
    match (r.rate, r.ci_low, r.ci_high) {
        (Some(p), Some(lo), Some(hi)) => {
            let mark = match r.bradley {
                Some(Bradley::Above) | Some(Bradley::Below) => " !",
                _ => "",
            };
            format!("{p:.3} [{lo:.3}, {hi:.3}]{mark}")
        }
        _ => "— (did not run)".into(),
    }
}

/// Writes the plan report.
///
/// # Errors
/// Only I/O errors of `out`.
pub fn render(r: &PlanReport, out: &mut dyn Write) -> io::Result<()> {
    let s = &r.spec;
    let cov = &r.simulations;
    let what = if s.mode == "like" {
        format!("calibration on {}", r.reproducibility.input.as_deref().unwrap_or("the data"))
    } else {
        "designed scenario".to_string()
    };
    writeln!(
        out,
        "quorum {} plan · {what}: {} of {} simulations (seed {}), α = {}",
        s.quorum_version, cov.completed, cov.requested, s.seed, s.alpha
    )?;
    writeln!(out)?;
    let factors: Vec<String> = s.factors.iter().map(|f| format!("{} ({})", f.name, f.levels.join(" < "))).collect();
    let sizes: Vec<String> = s.grid.iter().map(|g| format!("{} (N = {})", g.label, g.total)).collect();
    writeln!(out, "Design      {}; outcome `{}`", factors.join(" × "), s.outcome)?;
    writeln!(out, "n per cell  {}", sizes.join("; "))?;
    if let Some(e) = &s.errors {
        writeln!(out, "Errors      {}", e.description)?;
        let sds: Vec<f64> = s.cells.iter().filter_map(|c| c.sd).collect();
        if sds.iter().any(|&v| v != sds[0]) {
            let list: Vec<String> = sds.iter().map(|v| num(Some(*v), 3)).collect();
            writeln!(out, "Cell SDs    {} (root mean square 1)", list.join(", "))?;
        } else {
            writeln!(out, "Cell SDs    equal")?;
        }
    }
    if !s.effects.is_empty() {
        let list: Vec<String> = s.effects.iter().map(|e| format!("{} f = {}", e.term, e.f)).collect();
        writeln!(out, "Effects     {} (Cohen's f of the term, linear pattern, SD units)", list.join("; "))?;
    }
    if s.mode == "designed" && s.cells.iter().any(|c| c.mean.is_some()) {
        let list: Vec<String> = s.cells.iter().map(|c| num(c.mean, 3)).collect();
        writeln!(out, "Cell means  {} (effects condition, cell order)", list.join(", "))?;
    }
    writeln!(out, "Engines     {}", s.engines.join(", "))?;
    for c in &s.conditions {
        writeln!(out, "Condition   {}: {}", c.id, c.description)?;
    }
    if s.mode == "like" {
        writeln!(out)?;
        data_cells(r, out)?;
    }
    writeln!(out)?;
    let (lo, hi) = super::result::bradley_band(s.alpha);
    section(
        r,
        RateKind::TypeIError,
        &format!("Type-I error — the engine's null holds exactly (95% Clopper–Pearson intervals; ! = outside Bradley's band [{lo}, {hi}])"),
        out,
    )?;
    section(r, RateKind::Power, "Power — the term has an effect (95% Clopper–Pearson intervals)", out)?;
    let other = if s.mode == "like" {
        "Rejection rate with equal means — these engines' nulls are not about means".to_string()
    } else {
        "Rejection rate — the null is not exact for this engine (reasons below)".to_string()
    };
    section(r, RateKind::RejectionRate, &other, out)?;
    let mut reasons: Vec<&str> = Vec::new();
    for row in r.rates.iter().filter(|x| x.kind == RateKind::RejectionRate) {
        if let Some(n) = row.null_note.as_deref() {
            if !reasons.contains(&n) {
                reasons.push(n);
            }
        }
    }
    if s.mode == "designed" && !reasons.is_empty() {
        writeln!(out, "Why these nulls are not exact")?;
        for why in reasons {
            writeln!(out, "  · {why}")?;
        }
        writeln!(out)?;
    }
    if !s.noncentrality.is_empty() {
        let list: Vec<String> = s
            .noncentrality
            .iter()
            .map(|n| {
                let at = if s.grid.len() > 1 { format!(" at n = {}", s.grid[n.grid].label) } else { String::new() };
                format!("{}{at}: λ = {}", n.term, num(Some(n.lambda), 4))
            })
            .collect();
        writeln!(out, "Noncentrality of the classical F (its exact power under normal errors): {}", list.join("; "))?;
        writeln!(out)?;
    }
    if !r.flags.is_empty() {
        writeln!(out, "Outside Bradley's band")?;
        for f in &r.flags {
            writeln!(out, "  ! {}", f.message)?;
        }
        writeln!(out)?;
    }
    writeln!(out, "Notes")?;
    for n in &r.notes {
        writeln!(out, "  · {n}")?;
    }
    let rp = &r.reproducibility;
    if rp.stopped_at_time_limit {
        writeln!(
            out,
            "  · stopped at the --max-time limit after {} s: the intervals above show the Monte Carlo error of what ran",
            rp.elapsed_seconds.map(|t| format!("{t:.1}")).unwrap_or_else(|| "?".into())
        )?;
    }
    if let Some(sh) = &rp.shard {
        writeln!(out, "  · this is shard {sh}: combine the shards with `quorum merge` (JSON output)")?;
    }
    if !rp.merged_from.is_empty() {
        writeln!(out, "  · merged from {} file(s)", rp.merged_from.len())?;
    }
    writeln!(out)?;
    writeln!(out, "Reproduce: {} (quorum {}, {} threads)", rp.command, rp.version, rp.threads)
}

fn data_cells(r: &PlanReport, out: &mut dyn Write) -> io::Result<()> {
    let s = &r.spec;
    let trim = s.data.as_ref().map(|d| d.trim).unwrap_or(0.0);
    writeln!(out, "Cells of the data (resampling populations; trimmed centre at γ = {trim})")?;
    let mut cols: Vec<(String, Align)> = s.factors.iter().map(|f| (f.name.clone(), Align::Left)).collect();
    for h in ["n", "mean", "sd", "trimmed centre"] {
        cols.push((h.into(), Align::Right));
    }
    let refs: Vec<(&str, Align)> = cols.iter().map(|(h, a)| (h.as_str(), *a)).collect();
    let mut t = Table::new(&refs);
    for c in &s.cells {
        let Some(d) = &c.data else { continue };
        let mut row = c.levels.clone();
        row.extend([d.n.to_string(), num(Some(d.mean), 4), num(d.sd, 3), num(Some(d.trimmed_centre), 4)]);
        t.row(row);
    }
    writeln!(out, "{}", t.render(2))
}

fn section(r: &PlanReport, kind: RateKind, title: &str, out: &mut dyn Write) -> io::Result<()> {
    let rows: Vec<&RateRow> = r.rates.iter().filter(|x| x.kind == kind).collect();
    if rows.is_empty() {
        return Ok(());
    }
    writeln!(out, "{title}")?;
    let grid = &r.spec.grid;
    let mut cols: Vec<(String, Align)> =
        vec![("condition".into(), Align::Left), ("term".into(), Align::Left), ("engine".into(), Align::Left)];
    for g in grid {
        cols.push((format!("n = {}", g.label), Align::Left));
    }
    let refs: Vec<(&str, Align)> = cols.iter().map(|(h, a)| (h.as_str(), *a)).collect();
    let mut t = Table::new(&refs);
    // One line per (condition, term, engine), in the order of the terms, then engines.
    let mut keys: Vec<(&str, &str, &str)> = Vec::new();
    for cond in &r.spec.conditions {
        for f in term_order(r) {
            for e in &r.spec.engines {
                let k = (cond.id.as_str(), f, e.as_str());
                if rows.iter().any(|x| x.condition == k.0 && x.term == k.1 && x.engine == k.2) && !keys.contains(&k) {
                    keys.push(k);
                }
            }
        }
    }
    for (cond, term, engine) in keys {
        let mut line = vec![cond.to_string(), term.to_string(), engine.to_string()];
        for g in 0..grid.len() {
            let cell = rows
                .iter()
                .find(|x| x.condition == cond && x.term == term && x.engine == engine && x.grid == g)
                .map(|x| rate_cell(x))
                .unwrap_or_default();
            line.push(cell);
        }
        t.row(line);
    }
    writeln!(out, "{}", t.render(2))?;
    writeln!(out)
}

fn term_order(r: &PlanReport) -> Vec<&str> {
    let mut terms: Vec<&str> = Vec::new();
    for x in &r.rates {
        if !terms.contains(&x.term.as_str()) {
            terms.push(&x.term);
        }
    }
    terms
}

/// The calibration section that `analyze --calibrate` adds to the text report.
///
/// # Errors
/// Only I/O errors of `out`.
pub fn calibration_section(c: &Calibration, out: &mut dyn Write) -> io::Result<()> {
    writeln!(
        out,
        "Calibration on these data ({} simulated datasets, residuals resampled within cells under each engine's null; ! = outside Bradley's band [{}, {}])",
        c.sims, c.band[0], c.band[1]
    )?;
    let mut terms: Vec<&str> = Vec::new();
    for r in &c.rows {
        if !terms.contains(&r.term.as_str()) {
            terms.push(&r.term);
        }
    }
    let mut engines: Vec<&str> = Vec::new();
    for r in &c.rows {
        if !engines.contains(&r.engine.as_str()) {
            engines.push(&r.engine);
        }
    }
    let mut cols: Vec<(String, Align)> = vec![("engine".into(), Align::Left), ("rate".into(), Align::Left)];
    for t in &terms {
        cols.push((t.to_string(), Align::Left));
    }
    let refs: Vec<(&str, Align)> = cols.iter().map(|(h, a)| (h.as_str(), *a)).collect();
    let mut t = Table::new(&refs);
    for e in engines {
        let first = c.rows.iter().find(|r| r.engine == e);
        let what = match first.map(|r| r.kind) {
            Some(RateKind::TypeIError) => "type-I error",
            _ => "rejection rate, equal means",
        };
        let mut line = vec![e.to_string(), what.to_string()];
        for term in &terms {
            let cell = c
                .rows
                .iter()
                .find(|r| r.engine == e && r.term == *term)
                .map(|r| match r.rate {
                    Some(p) => {
                        let mark = matches!(r.bradley, Some(Bradley::Above) | Some(Bradley::Below));
                        format!("{p:.3}{}", if mark { " !" } else { "" })
                    }
                    None => "—".into(),
                })
                .unwrap_or_default();
            line.push(cell);
        }
        t.row(line);
    }
    writeln!(out, "{}", t.render(2))?;
    for f in &c.flags {
        writeln!(out, "  ! {f}")?;
    }
    for n in &c.notes {
        writeln!(out, "  · {n}")?;
    }
    writeln!(out)
}
