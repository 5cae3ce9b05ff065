//! The plan's SVG plots, in the shared style of [`crate::report::style`]:
//!
//! * `type-i-error[-n…].svg`: per engine (x) and term (marker), the type-I error with its
//!   95% interval, against the nominal α (dashed) and Bradley's band [α/2, 3α/2]
//!   (shaded); in `--like` plans the rank engines' rejection rates with equal means are
//!   drawn too, with open markers;
//! * `power-<term>.svg`: power against n per cell, one line per engine with interval bars.
//!
//! Plots draw what the [`PlanReport`] holds and compute nothing but positions.

use super::result::{bradley_band, PlanReport, RateRow};
use super::scenario::RateKind;
use crate::report::style::{self, Marker, Rgb};
use plotters::coord::Shift;
use plotters::prelude::*;

fn colour(c: Rgb) -> RGBColor {
    RGBColor(c.0, c.1, c.2)
}

fn engine_colour(id: &str) -> RGBColor {
    colour(style::PALETTE[style::engine_index(id)])
}

/// Draws a marker at a pixel position (the report's markers, at the plan's size).
fn marker<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    at: (i32, i32),
    m: Marker,
    c: RGBColor,
    open: bool,
) -> Result<(), DrawingAreaErrorKind<DB::ErrorType>> {
    crate::report::plots::draw_marker(area, at, m, c, style::MARKER_SIZE as i32, open)
}

fn text_style(size: u32) -> TextStyle<'static> {
    (style::FONT, size).into_font().color(&colour(style::INK))
}

/// Every plot of a report as (file name, SVG text).
pub fn all(report: &PlanReport) -> Vec<(String, String)> {
    let mut out = Vec::new();
    let grid = &report.spec.grid;
    for (g, point) in grid.iter().enumerate() {
        let rows: Vec<&RateRow> = report
            .rates
            .iter()
            .filter(|r| {
                r.grid == g
                    && (r.kind == RateKind::TypeIError
                        || (report.spec.mode == "like" && r.kind == RateKind::RejectionRate))
                    && r.rate.is_some()
            })
            .collect();
        if rows.is_empty() {
            continue;
        }
        let name = if grid.len() > 1 {
            format!("type-i-error-n{}.svg", file_part(&point.label))
        } else {
            "type-i-error.svg".into()
        };
        out.push((name, type_i_plot(report, &rows, &point.label)));
    }
    let mut terms: Vec<&str> = Vec::new();
    for r in report.rates.iter().filter(|r| r.kind == RateKind::Power) {
        if !terms.contains(&r.term.as_str()) {
            terms.push(&r.term);
        }
    }
    for term in terms {
        out.push((format!("power-{}.svg", file_part(term)), power_plot(report, term)));
    }
    out
}

fn file_part(s: &str) -> String {
    s.chars().map(|c| if c.is_ascii_alphanumeric() || c == '-' { c } else { '_' }).collect()
}

fn type_i_plot(report: &PlanReport, rows: &[&RateRow], n_label: &str) -> String {
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (style::WIDTH, style::HEIGHT)).into_drawing_area();
        let _ = draw_type_i(&root, report, rows, n_label);
        let _ = root.present();
    }
    svg
}

fn draw_type_i<DB: DrawingBackend>(
    root: &DrawingArea<DB, Shift>,
    report: &PlanReport,
    rows: &[&RateRow],
    n_label: &str,
) -> Result<(), DrawingAreaErrorKind<DB::ErrorType>> {
    root.fill(&WHITE)?;
    let alpha = report.spec.alpha;
    let (lo, hi) = bradley_band(alpha);
    let engines: Vec<&str> =
        report.spec.engines.iter().map(String::as_str).filter(|e| rows.iter().any(|r| r.engine == *e)).collect();
    let mut terms: Vec<&str> = Vec::new();
    for r in rows {
        if !terms.contains(&r.term.as_str()) {
            terms.push(&r.term);
        }
    }
    let y_max = rows.iter().filter_map(|r| r.ci_high).fold(2.0 * alpha, f64::max).min(1.0) * 1.08;
    let title = if report.spec.mode == "like" {
        format!("Rejection rates under each engine's null (data-shaped), n = {n_label}")
    } else {
        format!("Type-I error by engine and term, n = {n_label}")
    };
    let mut chart = ChartBuilder::on(root)
        .margin(style::MARGIN)
        .caption(title, text_style(style::TITLE_SIZE))
        .x_label_area_size(style::X_LABEL_AREA)
        .y_label_area_size(style::Y_LABEL_AREA)
        .build_cartesian_2d(-0.5f64..(engines.len() as f64 - 0.5), 0f64..y_max)?;
    let labels = engines.clone();
    chart
        .configure_mesh()
        .disable_x_mesh()
        .light_line_style(TRANSPARENT)
        .bold_line_style(colour(style::GRID))
        .x_labels(engines.len().max(1))
        .x_label_formatter(&|x| {
            let i = x.round();
            if (x - i).abs() < 1e-6 && i >= 0.0 && (i as usize) < labels.len() {
                labels[i as usize].to_string()
            } else {
                String::new()
            }
        })
        .y_desc("rejection rate")
        .x_desc("engine")
        .label_style(text_style(style::TICK_SIZE))
        .axis_desc_style(text_style(style::LABEL_SIZE))
        .draw()?;
    let x_end = engines.len() as f64 - 0.5;
    chart.draw_series(std::iter::once(Rectangle::new([(-0.5, lo), (x_end, hi)], colour(style::BAND).filled())))?;
    chart.draw_series(DashedLineSeries::new(
        vec![(-0.5, alpha), (x_end, alpha)],
        6,
        4,
        colour(style::REFERENCE).stroke_width(1),
    ))?;
    let width = 0.7;
    let step = if terms.len() > 1 { width / (terms.len() - 1) as f64 } else { 0.0 };
    for r in rows {
        let (Some(e), Some(t)) = (engines.iter().position(|e| *e == r.engine), terms.iter().position(|t| *t == r.term))
        else {
            continue;
        };
        let x = e as f64 - if terms.len() > 1 { width / 2.0 } else { 0.0 } + step * t as f64;
        let c = engine_colour(&r.engine);
        if let (Some(a), Some(b)) = (r.ci_low, r.ci_high) {
            chart.draw_series(std::iter::once(PathElement::new(vec![(x, a), (x, b)], c.stroke_width(1))))?;
        }
        if let Some(p) = r.rate {
            let at = chart.backend_coord(&(x, p));
            let open = r.kind == RateKind::RejectionRate;
            marker(root, at, style::MARKERS[t % style::MARKERS.len()], c, open)?;
        }
    }
    // Legend: which marker is which term, the band and α.
    let legend_y = style::MARGIN as i32 + style::TITLE_SIZE as i32 + 8;
    let mut x = style::Y_LABEL_AREA as i32 + style::MARGIN as i32 + 8;
    for (t, term) in terms.iter().enumerate() {
        marker(root, (x, legend_y + 6), style::MARKERS[t % style::MARKERS.len()], colour(style::INK), false)?;
        root.draw(&Text::new(term.to_string(), (x + 10, legend_y), text_style(style::TICK_SIZE)))?;
        x += 24 + 8 * term.chars().count() as i32;
    }
    root.draw(&Text::new(
        format!("shaded: Bradley's band [{lo}, {hi}]; dashed: α = {alpha}; bars: 95% intervals"),
        (x + 8, legend_y),
        text_style(style::TICK_SIZE),
    ))?;
    Ok(())
}

fn power_plot(report: &PlanReport, term: &str) -> String {
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (style::WIDTH, style::HEIGHT)).into_drawing_area();
        let _ = draw_power(&root, report, term);
        let _ = root.present();
    }
    svg
}

/// n per cell of a grid point for the x axis: the mean cell size.
fn n_of(report: &PlanReport, g: usize) -> f64 {
    let p = &report.spec.grid[g];
    p.total as f64 / p.n.len().max(1) as f64
}

fn draw_power<DB: DrawingBackend>(
    root: &DrawingArea<DB, Shift>,
    report: &PlanReport,
    term: &str,
) -> Result<(), DrawingAreaErrorKind<DB::ErrorType>> {
    root.fill(&WHITE)?;
    let rows: Vec<&RateRow> = report.rates.iter().filter(|r| r.kind == RateKind::Power && r.term == term).collect();
    let xs: Vec<f64> = (0..report.spec.grid.len()).map(|g| n_of(report, g)).collect();
    let (x_min, x_max) = xs.iter().fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &x| (a.min(x), b.max(x)));
    let pad = ((x_max - x_min) * 0.06).max(1.0);
    let effect =
        report.spec.effects.iter().find(|e| e.term == term).map(|e| format!(" (f = {})", e.f)).unwrap_or_default();
    let mut chart = ChartBuilder::on(root)
        .margin(style::MARGIN)
        .caption(format!("Power for {term}{effect}"), text_style(style::TITLE_SIZE))
        .x_label_area_size(style::X_LABEL_AREA)
        .y_label_area_size(style::Y_LABEL_AREA)
        .margin_right(150)
        .build_cartesian_2d((x_min - pad)..(x_max + pad), 0f64..1.02)?;
    chart
        .configure_mesh()
        .light_line_style(TRANSPARENT)
        .bold_line_style(colour(style::GRID))
        .x_label_formatter(&|x| format!("{}", x.round()))
        .x_desc("n per cell (mean over cells)")
        .y_desc("power")
        .label_style(text_style(style::TICK_SIZE))
        .axis_desc_style(text_style(style::LABEL_SIZE))
        .draw()?;
    let engines: Vec<&str> =
        report.spec.engines.iter().map(String::as_str).filter(|e| rows.iter().any(|r| r.engine == *e)).collect();
    for (k, engine) in engines.iter().enumerate() {
        let c = engine_colour(engine);
        let slot = style::engine_index(engine);
        let mut pts: Vec<(f64, f64)> = Vec::new();
        for r in rows.iter().filter(|r| r.engine == *engine) {
            let x = xs[r.grid];
            if let (Some(a), Some(b)) = (r.ci_low, r.ci_high) {
                chart.draw_series(std::iter::once(PathElement::new(vec![(x, a), (x, b)], c.stroke_width(1))))?;
            }
            if let Some(p) = r.rate {
                pts.push((x, p));
            }
        }
        pts.sort_by(|a, b| a.0.total_cmp(&b.0));
        chart.draw_series(LineSeries::new(pts.clone(), c.stroke_width(style::LINE_WIDTH)))?;
        for p in &pts {
            let at = chart.backend_coord(p);
            marker(root, at, style::MARKERS[slot], c, false)?;
        }
        // Legend in the right margin.
        let (w, _) = root.dim_in_pixel();
        let lx = w as i32 - 150;
        let ly = style::MARGIN as i32 + style::TITLE_SIZE as i32 + 24 + 20 * k as i32;
        root.draw(&PathElement::new(vec![(lx, ly + 6), (lx + 22, ly + 6)], c.stroke_width(style::LINE_WIDTH)))?;
        marker(root, (lx + 11, ly + 6), style::MARKERS[slot], c, false)?;
        root.draw(&Text::new(engine.to_string(), (lx + 30, ly), text_style(style::TICK_SIZE)))?;
    }
    Ok(())
}
