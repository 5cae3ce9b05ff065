//! The report's SVG plots (plotters, SVG backend only, no system fonts), in the shared
//! style of [`super::style`]:
//!
//! * `interaction.svg`: cell means with intervals, the `--axis` factor on the x axis and
//!   one line per level of the `--series` factor; panels for the other factors, or means
//!   averaged over them when there would be too many panels;
//! * `cells.svg`: per-cell box-and-strip plot; far-out points labelled by input line;
//! * `residual-qq.svg`: standardized residuals against normal quantiles;
//! * `residuals-fitted.svg`: residuals against fitted values (the cell means);
//! * `null-<engine>-<k>-<term>.svg`: each term's permutation null distribution with the
//!   observed statistic and the large-sample reference;
//! * `concordance.svg`: every engine's p for every term on a log axis, with α; a
//!   Monte Carlo p is drawn with its 99% interval, which is how an `undetermined`
//!   decision shows.
//!
//! Plots draw what [`Analysis`] and its [`PlotData`] hold and compute nothing but pixel
//! positions. Every user-supplied string passes through [`escape::xml_chars`] (plotters
//! escapes markup itself) and is shortened with [`style::fit_text`] to the room it has,
//! because plotters lays text out without fonts. Plot sizes follow the data (cells,
//! terms, engines, panels) so labels keep their room.

use super::escape;
use super::style::{self, Marker, Rgb};
use crate::diagnostics::plotdata::{CellPlot, Interaction, NullHistogram, PlotData, PointKind, QqPlot, QQ_POSITIONS};
use crate::results::{Analysis, Decision, EngineResult};
use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

/// One plot: its file name in `plots/`, a title and a description for the page, and
/// the SVG text.
#[derive(Debug, Clone)]
pub struct Plot {
    /// File name (ASCII, unique within a report).
    pub file: String,
    /// Short title (may contain user strings: escape before use in markup).
    pub title: String,
    /// How to read the plot, in words (may contain user strings).
    pub caption: String,
    /// The SVG document.
    pub svg: String,
    /// The engine the plot belongs to (null distributions), if any.
    pub engine: Option<String>,
}

type DrawResult = Result<(), DrawingAreaErrorKind<std::io::Error>>;
type Area<'a> = DrawingArea<SVGBackend<'a>, Shift>;

fn colour(c: Rgb) -> RGBColor {
    RGBColor(c.0, c.1, c.2)
}

fn font(size: u32, c: Rgb) -> TextStyle<'static> {
    (style::FONT, size).into_font().color(&colour(c))
}

/// Text style with an anchor.
fn anchored(size: u32, c: Rgb, h: HPos, v: VPos) -> TextStyle<'static> {
    font(size, c).pos(Pos::new(h, v))
}

/// A user string made safe for plotters and shortened to `max_px`.
fn label(s: &str, max_px: f64, size: u32) -> String {
    style::fit_text(&escape::xml_chars(s), max_px, size)
}

/// Renders `draw` into an SVG of `w` × `h` px.
fn svg(w: u32, h: u32, draw: impl FnOnce(&Area) -> DrawResult) -> String {
    let mut out = String::new();
    {
        let root = SVGBackend::with_string(&mut out, (w, h)).into_drawing_area();
        // Drawing into a String cannot fail but for a bug in plotters; a half plot is
        // still better than none, so errors are not propagated.
        let _ = root.fill(&WHITE).and_then(|_| draw(&root)).and_then(|_| root.present());
    }
    out
}

/// Draws a marker centred at a pixel position.
pub fn marker(area: &Area, at: (i32, i32), m: Marker, c: RGBColor, r: i32) -> DrawResult {
    draw_marker(area, at, m, c, r, false)
}

/// Draws marker `m` of radius `r` at a pixel position on any backend; `open` draws the
/// filled shapes as outlines (the plan's plots mark rates outside Bradley's band so).
///
/// # Errors
/// The backend's drawing errors.
pub fn draw_marker<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    at: (i32, i32),
    m: Marker,
    c: RGBColor,
    r: i32,
    open: bool,
) -> Result<(), DrawingAreaErrorKind<DB::ErrorType>> {
    let (x, y) = at;
    let line = c.stroke_width(2);
    let fill = if open { line } else { c.filled() };
    match m {
        Marker::Circle => area.draw(&Circle::new(at, r, fill)),
        Marker::Ring => area.draw(&Circle::new(at, r, line)),
        Marker::Square => area.draw(&Rectangle::new([(x - r, y - r), (x + r, y + r)], fill)),
        Marker::OpenSquare => area.draw(&Rectangle::new([(x - r, y - r), (x + r, y + r)], line)),
        Marker::Triangle => {
            area.draw(&Polygon::new(vec![(x, y - r - 1), (x - r - 1, y + r), (x + r + 1, y + r)], fill))
        }
        Marker::TriangleDown => {
            area.draw(&Polygon::new(vec![(x, y + r + 1), (x - r - 1, y - r), (x + r + 1, y - r)], fill))
        }
        Marker::Diamond => {
            area.draw(&Polygon::new(vec![(x, y - r - 2), (x + r + 1, y), (x, y + r + 2), (x - r - 1, y)], fill))
        }
        Marker::Cross => {
            area.draw(&PathElement::new(vec![(x - r, y - r), (x + r, y + r)], line))?;
            area.draw(&PathElement::new(vec![(x - r, y + r), (x + r, y - r)], line))
        }
    }
}

/// Title and subtitle lines at the top of a plot; returns the y below them.
fn heading(root: &Area, title: &str, subtitle: &[String]) -> Result<i32, DrawingAreaErrorKind<std::io::Error>> {
    let (w, _) = root.dim_in_pixel();
    let room = f64::from(w) - 2.0 * f64::from(style::MARGIN);
    let x = style::MARGIN as i32;
    let mut y = style::MARGIN as i32;
    root.draw(&Text::new(
        style::fit_text(title, room, style::REPORT_TITLE_SIZE),
        (x, y),
        anchored(style::REPORT_TITLE_SIZE, style::INK, HPos::Left, VPos::Top),
    ))?;
    y += 24;
    for line in subtitle {
        root.draw(&Text::new(
            style::fit_text(line, room, style::REPORT_TICK_SIZE),
            (x, y),
            anchored(style::REPORT_TICK_SIZE, style::REFERENCE, HPos::Left, VPos::Top),
        ))?;
        y += 17;
    }
    Ok(y + 6)
}

/// A legend entry: marker (or line) in a colour, and its text.
struct LegendItem {
    text: String,
    colour: Rgb,
    marker: Option<Marker>,
    line: bool,
}

/// Lays legend items out in rows that fit `width` from `x0`; returns the rows' total height.
fn legend_height(items: &[LegendItem], width: f64) -> i32 {
    let mut rows = 1;
    let mut x = 0.0;
    for it in items {
        let w = 34.0 + style::text_width(&it.text, style::REPORT_TICK_SIZE) + 14.0;
        if x > 0.0 && x + w > width {
            rows += 1;
            x = 0.0;
        }
        x += w;
    }
    rows * 20
}

fn draw_legend(root: &Area, items: &[LegendItem], x0: i32, y0: i32, width: f64) -> DrawResult {
    let mut x = 0.0;
    let mut y = y0;
    for it in items {
        let w = 34.0 + style::text_width(&it.text, style::REPORT_TICK_SIZE) + 14.0;
        if x > 0.0 && x + w > width {
            y += 20;
            x = 0.0;
        }
        let px = x0 + x as i32;
        let c = colour(it.colour);
        if it.line {
            root.draw(&PathElement::new(vec![(px, y + 8), (px + 24, y + 8)], c.stroke_width(style::LINE_WIDTH)))?;
        }
        if let Some(m) = it.marker {
            marker(root, (px + 12, y + 8), m, c, style::MARKER_SIZE as i32)?;
        }
        root.draw(&Text::new(
            it.text.clone(),
            (px + 30, y + 8),
            anchored(style::REPORT_TICK_SIZE, style::INK, HPos::Left, VPos::Center),
        ))?;
        x += w;
    }
    Ok(())
}

/// Every plot of the report, in the order the page shows them.
pub fn all(a: &Analysis) -> Vec<Plot> {
    let mut out = Vec::new();
    if let Some(pd) = &a.plot_data {
        if !pd.cells.is_empty() {
            out.push(interaction(pd));
            out.push(cells(pd));
        }
        if let Some(qq) = &pd.qq {
            out.push(residual_qq(pd, qq));
        }
        if pd.cells.iter().any(|c| !c.points.is_empty()) {
            out.push(residuals_fitted(pd));
        }
    }
    if a.engines.iter().any(|e| e.terms.iter().any(|t| t.p.is_some())) {
        out.push(concordance(a));
    }
    if let Some(pd) = &a.plot_data {
        let terms: Vec<&str> = a.concordance.iter().map(|c| c.term.as_str()).collect();
        for h in &pd.nulls {
            let k = terms.iter().position(|t| *t == h.term).map(|k| k + 1).unwrap_or(0);
            out.push(null_distribution(h, k));
        }
    }
    out
}

/// ASCII file-name part of a user string (unique names come from the index beside it).
fn file_part(s: &str) -> String {
    let p: String = s.chars().take(40).map(|c| if c.is_ascii_alphanumeric() || c == '-' { c } else { '_' }).collect();
    if p.is_empty() {
        "term".into()
    } else {
        p
    }
}

/// The y range of values with 6% padding (a unit range around a single value).
fn padded(lo: f64, hi: f64) -> (f64, f64) {
    if !(lo.is_finite() && hi.is_finite()) {
        return (0.0, 1.0);
    }
    if hi > lo {
        let pad = (hi - lo) * 0.06;
        (lo - pad, hi + pad)
    } else {
        let pad = if lo == 0.0 { 1.0 } else { lo.abs() * 0.1 };
        (lo - pad, hi + pad)
    }
}

/// Number formatting for ticks: up to 4 significant digits, no trailing zeros.
fn tick(v: f64) -> String {
    if v == 0.0 {
        return "0".into();
    }
    let a = v.abs();
    if !(1e-3..1e5).contains(&a) {
        return format!("{v:.1e}");
    }
    let digits = (3 - a.log10().floor() as i32).clamp(0, 6) as usize;
    let s = format!("{v:.digits$}");
    if s.contains('.') {
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        s
    }
}

/// A point's marker, colour and radius by its position relative to the fences.
fn point_style(kind: PointKind) -> (Marker, RGBAColor, i32) {
    match kind {
        PointKind::Inside => (Marker::Circle, colour(style::POINT).mix(0.45), 3),
        PointKind::Outside => (Marker::Triangle, colour(style::OUTSIDE).mix(1.0), 5),
        PointKind::FarOut => (Marker::Diamond, colour(style::FAR_OUT).mix(1.0), 5),
    }
}

fn draw_point(root: &Area, at: (i32, i32), kind: PointKind) -> DrawResult {
    let (m, c, r) = point_style(kind);
    let (x, y) = at;
    match m {
        Marker::Circle => root.draw(&Circle::new(at, r, c.filled())),
        Marker::Triangle => {
            root.draw(&Polygon::new(vec![(x, y - r - 1), (x - r - 1, y + r), (x + r + 1, y + r)], c.filled()))
        }
        _ => root.draw(&Polygon::new(vec![(x, y - r - 2), (x + r + 1, y), (x, y + r + 2), (x - r - 1, y)], c.filled())),
    }
}

/// A chart with numeric axes over `x` and `y`, grid, ticks and axis names, in the
/// report's style (the residual plots).
fn scatter_axes<'a, 'b>(
    area: &'a Area<'b>,
    x: (f64, f64),
    y: (f64, f64),
    x_desc: &str,
    y_desc: &str,
) -> Result<
    ChartContext<
        'a,
        SVGBackend<'b>,
        Cartesian2d<plotters::coord::types::RangedCoordf64, plotters::coord::types::RangedCoordf64>,
    >,
    DrawingAreaErrorKind<std::io::Error>,
> {
    let mut chart = ChartBuilder::on(area)
        .margin(style::MARGIN)
        .x_label_area_size(style::X_LABEL_AREA)
        .y_label_area_size(style::Y_LABEL_AREA + 8)
        .build_cartesian_2d(x.0..x.1, y.0..y.1)?;
    chart
        .configure_mesh()
        .light_line_style(TRANSPARENT)
        .bold_line_style(colour(style::GRID))
        .x_label_formatter(&|v| tick(*v))
        .y_label_formatter(&|v| tick(*v))
        .x_desc(x_desc)
        .y_desc(y_desc)
        .label_style(font(style::REPORT_TICK_SIZE, style::INK))
        .axis_desc_style(font(style::REPORT_LABEL_SIZE, style::INK))
        .draw()?;
    Ok(chart)
}

/// Most point labels ("line 17") drawn per plot.
const MAX_POINT_LABELS: usize = 24;

/// A far-out point that may get a label: pixel position, input line, and how extreme it
/// is (labels go to the most extreme points first).
type LabelCandidate = ((i32, i32), u64, f64);

/// A pixel rectangle `[left, top, right, bottom]` that a label must not cover.
type Obstacle = [f64; 4];

/// Half the side of the square around a drawn point that labels keep clear of.
const POINT_CLEARANCE: f64 = 5.0;

/// The square around a drawn point that labels keep clear of.
fn point_obstacle((x, y): (i32, i32)) -> Obstacle {
    let (x, y) = (f64::from(x), f64::from(y));
    [x - POINT_CLEARANCE, y - POINT_CLEARANCE, x + POINT_CLEARANCE, y + POINT_CLEARANCE]
}

/// Whether two rectangles overlap.
fn overlaps(a: &Obstacle, b: &Obstacle) -> bool {
    !(a[2] <= b[0] || a[0] >= b[2] || a[3] <= b[1] || a[1] >= b[3])
}

/// Labels far-out points by input line, the most extreme first, skipping a label that
/// would cover a label already placed, a drawn point or box (`obstacles`), or leave the
/// image (tried right of the point, then left); at most [`MAX_POINT_LABELS`]. Points in
/// a dense run therefore go unlabelled rather than get an unreadable label; every
/// outlying point is listed by line in the page's tables.
fn label_points(root: &Area, mut candidates: Vec<LabelCandidate>, obstacles: &[Obstacle]) -> DrawResult {
    candidates.sort_by(|a, b| b.2.total_cmp(&a.2).then(a.1.cmp(&b.1)));
    let (w, h) = root.dim_in_pixel();
    let (w, h) = (f64::from(w), f64::from(h));
    let half_h = 8.0;
    let mut placed: Vec<Obstacle> = Vec::new();
    for ((x, y), line, _) in candidates {
        if placed.len() >= MAX_POINT_LABELS {
            break;
        }
        let text = format!("line {line}");
        let tw = style::text_width(&text, style::REPORT_TICK_SIZE);
        let (x, y) = (f64::from(x), f64::from(y));
        let right = [x + 8.0, y - half_h, x + 8.0 + tw, y + half_h];
        let left = [x - 8.0 - tw, y - half_h, x - 8.0, y + half_h];
        let free = |b: &[f64; 4]| {
            b[0] >= 2.0
                && b[2] <= w - 2.0
                && b[1] >= 0.0
                && b[3] <= h
                && !placed.iter().chain(obstacles).any(|p| overlaps(b, p))
        };
        let spot = if free(&right) {
            Some((right, HPos::Left, x + 8.0))
        } else if free(&left) {
            Some((left, HPos::Right, x - 8.0))
        } else {
            None
        };
        if let Some((b, anchor, lx)) = spot {
            root.draw(&Text::new(
                text,
                (lx.round() as i32, y.round() as i32),
                anchored(style::REPORT_TICK_SIZE, style::FAR_OUT, anchor, VPos::Center),
            ))?;
            placed.push(b);
        }
    }
    Ok(())
}

/// How far-out points are labelled, for subtitles.
const LABEL_RULE: &str = "most extreme labelled by input line";

// ---------------------------------------------------------------- interaction plot

const PANEL_W: u32 = 380;
const PANEL_H: u32 = 320;

fn interaction(pd: &PlotData) -> Plot {
    let it = &pd.interaction;
    let axis_name = &pd.factors[it.axis];
    let series_name = it.series.map(|s| pd.factors[s].as_str());
    let n_panels = it.panels.len().max(1);
    let cols = if n_panels == 1 {
        1
    } else if n_panels == 2 || n_panels == 4 {
        2
    } else {
        3
    };
    let rows = n_panels.div_ceil(cols);
    let width = if n_panels == 1 { style::WIDTH } else { (cols as u32 * PANEL_W).max(style::WIDTH) };
    let series_levels: Vec<String> = match it.series {
        Some(s) => levels_of(pd, s),
        None => Vec::new(),
    };
    let items: Vec<LegendItem> = series_levels
        .iter()
        .enumerate()
        .map(|(s, l)| LegendItem {
            text: label(l, 200.0, style::REPORT_TICK_SIZE),
            colour: series_colour(s),
            marker: Some(series_marker(s)),
            line: true,
        })
        .collect();
    let legend_room = f64::from(width) - 2.0 * f64::from(style::MARGIN);
    let series_label = series_name.map(|s| format!("lines: {}", escape::xml_chars(s)));
    let mut subtitle = vec![format!("bars: {}", it.interval)];
    if !it.averaged_over.is_empty() {
        let names: Vec<String> = it.averaged_over.iter().map(|&f| escape::xml_chars(&pd.factors[f])).collect();
        subtitle.push(format!("averaged over {} (more than 12 panels otherwise)", names.join(", ")));
    }
    if let Some(s) = &series_label {
        subtitle.push(s.clone());
    }
    let legend_h = if items.is_empty() { 0 } else { legend_height(&items, legend_room) };
    let header = style::MARGIN as i32 + 24 + 17 * subtitle.len() as i32 + 6 + legend_h + 6;
    let panel_h = if n_panels == 1 { style::HEIGHT } else { PANEL_H };
    let height = header as u32 + rows as u32 * panel_h + style::MARGIN;
    // Shared y range over every panel.
    let (lo, hi) = it
        .panels
        .iter()
        .flat_map(|p| &p.means)
        .flat_map(|m| [Some(m.mean), m.low, m.high])
        .flatten()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), v| (a.min(v), b.max(v)));
    let (y0, y1) = padded(lo, hi);
    let title = match series_name {
        Some(s) => format!(
            "Cell means of {} by {} and {}",
            escape::xml_chars(&pd.outcome),
            escape::xml_chars(axis_name),
            escape::xml_chars(s)
        ),
        None => format!("Cell means of {} by {}", escape::xml_chars(&pd.outcome), escape::xml_chars(axis_name)),
    };
    let axis_levels = levels_of(pd, it.axis);
    let body = svg(width, height, |root| {
        let top = heading(root, &title, &subtitle)?;
        if !items.is_empty() {
            draw_legend(root, &items, style::MARGIN as i32, top, legend_room)?;
        }
        let area = root.margin(header as u32, style::MARGIN, 0, 0);
        let panels = area.split_evenly((rows, cols));
        for (p, panel) in it.panels.iter().enumerate() {
            let caption: Vec<String> =
                panel.at.iter().map(|(f, l)| format!("{} = {}", escape::xml_chars(f), escape::xml_chars(l))).collect();
            interaction_panel(
                root,
                &panels[p],
                it,
                &axis_levels,
                axis_name,
                &pd.outcome,
                &caption.join(", "),
                (y0, y1),
                p % cols == 0,
                panel,
            )?;
        }
        Ok(())
    });
    let mut caption = format!("Cell means of {} with {}; x axis: {}", pd.outcome, it.interval, axis_name);
    if let Some(s) = series_name {
        caption.push_str(&format!("; one line per level of {s}"));
    }
    if !it.panel_factors.is_empty() {
        let names: Vec<&str> = it.panel_factors.iter().map(|&f| pd.factors[f].as_str()).collect();
        caption.push_str(&format!("; one panel per level combination of {}", names.join(", ")));
    }
    if !it.averaged_over.is_empty() {
        let names: Vec<&str> = it.averaged_over.iter().map(|&f| pd.factors[f].as_str()).collect();
        caption.push_str(&format!(
            "; averaged over {} (unweighted means of the cells), since one panel per combination would make more than 12",
            names.join(", ")
        ));
    }
    caption.push('.');
    Plot { file: "interaction.svg".into(), title: "Interaction plot".into(), caption, svg: body, engine: None }
}

fn levels_of(pd: &PlotData, factor: usize) -> Vec<String> {
    // The cells list every level combination in row-major order; read the labels of
    // `factor` in order of first appearance, which is level order.
    let mut out: Vec<String> = Vec::new();
    for c in &pd.cells {
        if let Some(l) = c.levels.get(factor) {
            if !out.contains(l) {
                out.push(l.clone());
            }
        }
    }
    out
}

fn series_colour(s: usize) -> Rgb {
    style::PALETTE[s % style::PALETTE.len()]
}

fn series_marker(s: usize) -> Marker {
    style::MARKERS[(s + s / style::MARKERS.len()) % style::MARKERS.len()]
}

#[allow(clippy::too_many_arguments)]
fn interaction_panel(
    root: &Area,
    area: &Area,
    it: &Interaction,
    axis_levels: &[String],
    axis_name: &str,
    outcome: &str,
    caption: &str,
    (y0, y1): (f64, f64),
    first_column: bool,
    panel: &crate::diagnostics::plotdata::InteractionPanel,
) -> DrawResult {
    let (w, _) = area.dim_in_pixel();
    let n_axis = axis_levels.len().max(1);
    let y_area = if first_column { style::Y_LABEL_AREA + 12 } else { style::Y_LABEL_AREA };
    let plot_w = f64::from(w) - f64::from(y_area) - 2.0 * f64::from(style::MARGIN);
    let slot = plot_w / n_axis as f64;
    let mut builder = ChartBuilder::on(area);
    builder.margin(style::MARGIN).x_label_area_size(style::X_LABEL_AREA).y_label_area_size(y_area);
    if !caption.is_empty() {
        builder.caption(
            style::fit_text(caption, f64::from(w) - 20.0, style::REPORT_LABEL_SIZE),
            font(style::REPORT_LABEL_SIZE, style::INK),
        );
    }
    let mut chart = builder.build_cartesian_2d(-0.5f64..(n_axis as f64 - 0.5), y0..y1)?;
    let x_labels: Vec<String> = axis_levels.iter().map(|l| label(l, slot - 6.0, style::REPORT_TICK_SIZE)).collect();
    let y_desc =
        if first_column { label(outcome, f64::from(PANEL_H) - 80.0, style::REPORT_LABEL_SIZE) } else { String::new() };
    chart
        .configure_mesh()
        .disable_x_mesh()
        .light_line_style(TRANSPARENT)
        .bold_line_style(colour(style::GRID))
        .x_labels(n_axis)
        .x_label_formatter(&|x| {
            let i = x.round();
            if (x - i).abs() < 1e-6 && i >= 0.0 && (i as usize) < x_labels.len() {
                x_labels[i as usize].clone()
            } else {
                String::new()
            }
        })
        .y_labels(6)
        .y_label_formatter(&|y| tick(*y))
        .x_desc(label(axis_name, plot_w, style::REPORT_LABEL_SIZE))
        .y_desc(y_desc)
        .label_style(font(style::REPORT_TICK_SIZE, style::INK))
        .axis_desc_style(font(style::REPORT_LABEL_SIZE, style::INK))
        .draw()?;
    let n_series = panel.means.iter().map(|m| m.series_level + 1).max().unwrap_or(1);
    let dodge = if n_series > 1 { (0.3 / (n_series - 1) as f64).min(0.12) } else { 0.0 };
    for s in 0..n_series {
        let c = colour(series_colour(s));
        let offset = (s as f64 - (n_series - 1) as f64 / 2.0) * dodge;
        let pts: Vec<(f64, f64)> = panel
            .means
            .iter()
            .filter(|m| m.series_level == s)
            .map(|m| (m.axis_level as f64 + offset, m.mean))
            .collect();
        for m in panel.means.iter().filter(|m| m.series_level == s) {
            if let (Some(a), Some(b)) = (m.low, m.high) {
                let x = m.axis_level as f64 + offset;
                chart.draw_series(std::iter::once(PathElement::new(vec![(x, a), (x, b)], c.stroke_width(1))))?;
                for end in [a, b] {
                    let (px, py) = chart.backend_coord(&(x, end));
                    root.draw(&PathElement::new(vec![(px - 4, py), (px + 4, py)], c.stroke_width(1)))?;
                }
            }
        }
        chart.draw_series(LineSeries::new(pts.clone(), c.stroke_width(style::LINE_WIDTH)))?;
        for p in &pts {
            marker(root, chart.backend_coord(p), series_marker(s), c, style::MARKER_SIZE as i32)?;
        }
    }
    let _ = it;
    Ok(())
}

// ---------------------------------------------------------------- cells: box and strip

fn cells(pd: &PlotData) -> Plot {
    let n_cells = pd.cells.len().max(1);
    let k = pd.factors.len();
    let y_area = 92u32;
    let slot = ((f64::from(style::WIDTH) - f64::from(y_area) - 2.0 * f64::from(style::MARGIN)) / n_cells as f64)
        .clamp(34.0, 110.0);
    let width =
        ((f64::from(y_area) + 2.0 * f64::from(style::MARGIN) + slot * n_cells as f64).ceil() as u32).max(style::WIDTH);
    let label_rows = 18 * k as u32 + 8;
    let shown: usize = pd.cells.iter().map(|c| c.points.len()).sum();
    let n_total: usize = pd.cells.iter().map(|c| c.n).sum();
    let mut subtitle = vec![
        "box: quartiles (type 7) and median; whiskers: most extreme values within 1.5 × IQR; +: cell mean".to_string(),
        format!("▲ beyond 1.5 × IQR; ◆ beyond 3 × IQR (far out), {LABEL_RULE}"),
    ];
    if shown < n_total {
        subtitle.push(format!(
            "{shown} of {n_total} points drawn: every point beyond the fences, the others thinned evenly by rank"
        ));
    }
    let header = style::MARGIN + 24 + 17 * subtitle.len() as u32 + 6;
    let height = header + 420 + label_rows;
    let (lo, hi) = pd
        .cells
        .iter()
        .flat_map(|c| c.points.iter().map(|p| p.value).chain([c.whisker_low, c.whisker_high, c.mean]))
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), v| (a.min(v), b.max(v)));
    let (y0, y1) = padded(lo, hi);
    let title = format!("{} in each cell", escape::xml_chars(&pd.outcome));
    let body = svg(width, height, |root| {
        heading(root, &title, &subtitle)?;
        let area = root.margin(header, style::MARGIN, 0, 0);
        let mut chart = ChartBuilder::on(&area)
            .margin(style::MARGIN)
            .x_label_area_size(label_rows)
            .y_label_area_size(y_area)
            .build_cartesian_2d(-0.5f64..(n_cells as f64 - 0.5), y0..y1)?;
        chart
            .configure_mesh()
            .disable_x_mesh()
            .light_line_style(TRANSPARENT)
            .bold_line_style(colour(style::GRID))
            .x_labels(0)
            .y_labels(8)
            .y_label_formatter(&|y| tick(*y))
            .y_desc(label(&pd.outcome, 380.0, style::REPORT_LABEL_SIZE))
            .label_style(font(style::REPORT_TICK_SIZE, style::INK))
            .axis_desc_style(font(style::REPORT_LABEL_SIZE, style::INK))
            .draw()?;
        let mut labels = Vec::new();
        let mut obstacles = Vec::new();
        for (i, c) in pd.cells.iter().enumerate() {
            obstacles.push(draw_box(root, &|x, y| chart.backend_coord(&(x, y)), i as f64, c)?);
            for (j, p) in c.points.iter().enumerate() {
                let x = i as f64 + jitter(j) * 0.34;
                let at = chart.backend_coord(&(x, p.value));
                draw_point(root, at, p.kind)?;
                obstacles.push(point_obstacle(at));
                if p.kind == PointKind::FarOut {
                    labels.push((at, p.line, p.standardized.unwrap_or(p.residual).abs()));
                }
            }
            let (mx, my) = chart.backend_coord(&(i as f64, c.mean));
            root.draw(&PathElement::new(vec![(mx - 6, my), (mx + 6, my)], colour(style::INK).stroke_width(2)))?;
            root.draw(&PathElement::new(vec![(mx, my - 6), (mx, my + 6)], colour(style::INK).stroke_width(2)))?;
            obstacles.push([f64::from(mx - 7), f64::from(my - 7), f64::from(mx + 7), f64::from(my + 7)]);
        }
        label_points(root, labels, &obstacles)?;
        // Cell labels: one row per factor under each slot, factor names on the left.
        let (_, base) = chart.backend_coord(&(0.0, y0));
        for (f, name) in pd.factors.iter().enumerate() {
            let y = base + 8 + 18 * f as i32;
            root.draw(&Text::new(
                label(name, f64::from(y_area) - 8.0, style::REPORT_TICK_SIZE),
                (style::MARGIN as i32 + y_area as i32 - 6, y),
                anchored(style::REPORT_TICK_SIZE, style::REFERENCE, HPos::Right, VPos::Top),
            ))?;
            for (i, c) in pd.cells.iter().enumerate() {
                let (x, _) = chart.backend_coord(&(i as f64, y0));
                let text = c.levels.get(f).map(|l| label(l, slot - 6.0, style::REPORT_TICK_SIZE)).unwrap_or_default();
                root.draw(&Text::new(
                    text,
                    (x, y),
                    anchored(style::REPORT_TICK_SIZE, style::INK, HPos::Center, VPos::Top),
                ))?;
            }
        }
        Ok(())
    });
    let caption = format!(
        "Every value of {} in each cell over its box (quartiles, median) and Tukey whiskers; points beyond 1.5 × IQR are triangles, points beyond 3 × IQR diamonds labelled with their input line; + marks the cell mean.",
        pd.outcome
    );
    Plot { file: "cells.svg".into(), title: "Cells: boxes and points".into(), caption, svg: body, engine: None }
}

/// A deterministic horizontal offset in [−0.5, 0.5) for the j-th point of a strip
/// (golden-ratio sequence: evenly spread, no random numbers).
fn jitter(j: usize) -> f64 {
    ((j as f64 + 1.0) * 0.618_033_988_749_895).fract() - 0.5
}

/// Draws a cell's box and whiskers; returns the rectangle they cover (for label placement).
fn draw_box(
    root: &Area,
    px: &dyn Fn(f64, f64) -> (i32, i32),
    x: f64,
    c: &CellPlot,
) -> Result<Obstacle, DrawingAreaErrorKind<std::io::Error>> {
    let half = 0.26;
    let ink = colour(style::INK);
    let (l, t) = px(x - half, c.q3);
    let (r, b) = px(x + half, c.q1);
    root.draw(&Rectangle::new([(l, t), (r, b)], colour(style::FILL).mix(0.7).filled()))?;
    root.draw(&Rectangle::new([(l, t), (r, b)], ink.stroke_width(1)))?;
    let (_, m) = px(x, c.median);
    root.draw(&PathElement::new(vec![(l, m), (r, m)], ink.stroke_width(3)))?;
    let (cx, wl) = px(x, c.whisker_low);
    let (_, wh) = px(x, c.whisker_high);
    let cap = ((r - l) / 4).max(3);
    for (end, edge) in [(wl, b), (wh, t)] {
        root.draw(&PathElement::new(vec![(cx, edge), (cx, end)], ink.stroke_width(1)))?;
        root.draw(&PathElement::new(vec![(cx - cap, end), (cx + cap, end)], ink.stroke_width(1)))?;
    }
    let (top, bottom) = (wh.min(t).min(wl), wl.max(b).max(wh));
    Ok([f64::from(l), f64::from(top), f64::from(r), f64::from(bottom)])
}

// ---------------------------------------------------------------- residual plots

fn residual_qq(pd: &PlotData, qq: &QqPlot) -> Plot {
    let mut subtitle = vec![
        format!("positions: {QQ_POSITIONS}; dashed: the line y = x"),
        "residuals standardized by √(MSE(1 − 1/nᵢ)), nᵢ the size of the point's cell".to_string(),
        format!("▲ beyond 1.5 × IQR in its cell; ◆ beyond 3 × IQR, {LABEL_RULE}"),
    ];
    if qq.points.len() < qq.n || qq.excluded > 0 {
        let mut s = format!("{} of {} standardized residuals drawn", qq.points.len(), qq.n);
        if qq.excluded > 0 {
            s.push_str(&format!("; {} observation(s) in one-observation cells have none", qq.excluded));
        }
        subtitle.push(s);
    }
    let header = style::MARGIN + 24 + 17 * subtitle.len() as u32 + 6;
    let (w, h) = (style::WIDTH, header + 440);
    let (xl, xh) = qq
        .points
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), p| (a.min(p.theoretical), b.max(p.theoretical)));
    let (yl, yh) = qq
        .points
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), p| (a.min(p.standardized), b.max(p.standardized)));
    let (x0, x1) = padded(xl, xh);
    let (y0, y1) = padded(yl.min(xl), yh);
    // The line y = x where both axes show it.
    let (lo, hi) = (x0.max(y0), x1.min(y1));
    let title = format!("Normal Q-Q plot of the residuals ({})", escape::xml_chars(&pd.outcome));
    let body = svg(w, h, |root| {
        heading(root, &title, &subtitle)?;
        let area = root.margin(header, style::MARGIN, 0, 0);
        let mut chart = scatter_axes(&area, (x0, x1), (y0, y1), "normal quantile", "standardized residual")?;
        if hi > lo {
            chart.draw_series(DashedLineSeries::new(
                vec![(lo, lo), (hi, hi)],
                6,
                4,
                colour(style::REFERENCE).stroke_width(1),
            ))?;
        }
        let mut labels = Vec::new();
        let mut obstacles = Vec::new();
        for p in &qq.points {
            let at = chart.backend_coord(&(p.theoretical, p.standardized));
            draw_point(root, at, p.kind)?;
            obstacles.push(point_obstacle(at));
            if p.kind == PointKind::FarOut {
                labels.push((at, p.line, p.standardized.abs()));
            }
        }
        label_points(root, labels, &obstacles)
    });
    Plot {
        file: "residual-qq.svg".into(),
        title: "Residuals against the normal distribution".into(),
        caption: format!(
            "Standardized residuals of {} (sorted) against normal quantiles at Blom's plotting positions; points near the dashed line y = x look normal, a curve bending away at both ends means heavy or light tails, at one end skew.",
            pd.outcome
        ),
        svg: body,
        engine: None,
    }
}

fn residuals_fitted(pd: &PlotData) -> Plot {
    let subtitle = vec![
        "fitted value: the cell mean; dashed: zero; a fan shape means unequal variances".to_string(),
        format!("▲ beyond 1.5 × IQR in its cell; ◆ beyond 3 × IQR, {LABEL_RULE}"),
    ];
    let header = style::MARGIN + 24 + 17 * subtitle.len() as u32 + 6;
    let (w, h) = (style::WIDTH, header + 440);
    let (xl, xh) = pd.cells.iter().fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), c| (a.min(c.mean), b.max(c.mean)));
    let (yl, yh) = pd
        .cells
        .iter()
        .flat_map(|c| c.points.iter().map(|p| p.residual))
        .fold((0.0f64, 0.0f64), |(a, b), v| (a.min(v), b.max(v)));
    let (x0, x1) = padded(xl, xh);
    let (y0, y1) = padded(yl, yh);
    let spread = (x1 - x0) * 0.012;
    let title = format!("Residuals against fitted values ({})", escape::xml_chars(&pd.outcome));
    let body = svg(w, h, |root| {
        heading(root, &title, &subtitle)?;
        let area = root.margin(header, style::MARGIN, 0, 0);
        let mut chart = scatter_axes(&area, (x0, x1), (y0, y1), "fitted value (cell mean)", "residual")?;
        chart.draw_series(DashedLineSeries::new(
            vec![(x0, 0.0), (x1, 0.0)],
            6,
            4,
            colour(style::REFERENCE).stroke_width(1),
        ))?;
        let mut labels = Vec::new();
        let mut obstacles = Vec::new();
        for c in &pd.cells {
            for (j, p) in c.points.iter().enumerate() {
                let at = chart.backend_coord(&(c.mean + jitter(j) * spread, p.residual));
                draw_point(root, at, p.kind)?;
                obstacles.push(point_obstacle(at));
                if p.kind == PointKind::FarOut {
                    labels.push((at, p.line, p.standardized.unwrap_or(p.residual).abs()));
                }
            }
        }
        label_points(root, labels, &obstacles)
    });
    Plot {
        file: "residuals-fitted.svg".into(),
        title: "Residuals against fitted values".into(),
        caption: format!(
            "Residuals of {} (value minus cell mean) against the cell means; a spread that grows or shrinks with the mean points to unequal variances.",
            pd.outcome
        ),
        svg: body,
        engine: None,
    }
}

// ---------------------------------------------------------------- null distributions

fn null_distribution(h: &NullHistogram, k: usize) -> Plot {
    let stat = h.statistic.as_str();
    let how = if h.exact { "all rearrangements enumerated" } else { "random permutations" };
    let mut subtitle = vec![format!(
        "{} {how}; bars: share of permuted {stat} in each bin{}",
        h.resamples,
        h.reference.as_ref().map(|r| format!("; line: the share under {r}")).unwrap_or_default()
    )];
    if h.beyond > 0.0 {
        subtitle.push(format!("{} of the permuted statistics lie beyond the right edge", share_text(h.beyond)));
    }
    let header = style::MARGIN + 24 + 17 * subtitle.len() as u32 + 6;
    let (w, ht) = (style::WIDTH, header + 400);
    let x0 = h.bins.first().map(|b| b.low).unwrap_or(0.0);
    let x1 = h.bins.last().map(|b| b.high).unwrap_or(1.0);
    let y_max =
        h.bins.iter().flat_map(|b| [Some(b.share), b.reference]).flatten().fold(0.0f64, f64::max).max(1e-9) * 1.15;
    let title = format!("Permutation null of {stat} for {} ({})", escape::xml_chars(&h.term), h.engine);
    let body = svg(w, ht, |root| {
        heading(root, &title, &subtitle)?;
        let area = root.margin(header, style::MARGIN, 0, 0);
        let mut chart = ChartBuilder::on(&area)
            .margin(style::MARGIN)
            .margin_right(style::MARGIN + 24)
            .x_label_area_size(style::X_LABEL_AREA)
            .y_label_area_size(style::Y_LABEL_AREA + 8)
            .build_cartesian_2d(x0..x1, 0f64..y_max)?;
        chart
            .configure_mesh()
            .disable_x_mesh()
            .light_line_style(TRANSPARENT)
            .bold_line_style(colour(style::GRID))
            .x_label_formatter(&|v| tick(*v))
            .y_label_formatter(&|v| tick(*v))
            .x_desc(format!("permuted {stat}"))
            .y_desc("share of resamples")
            .label_style(font(style::REPORT_TICK_SIZE, style::INK))
            .axis_desc_style(font(style::REPORT_LABEL_SIZE, style::INK))
            .draw()?;
        chart.draw_series(
            h.bins.iter().map(|b| Rectangle::new([(b.low, 0.0), (b.high, b.share)], colour(style::FILL).filled())),
        )?;
        chart.draw_series(h.bins.iter().map(|b| {
            Rectangle::new([(b.low, 0.0), (b.high, b.share)], colour(style::POINT).mix(0.6).stroke_width(1))
        }))?;
        let reference: Vec<(f64, f64)> =
            h.bins.iter().filter_map(|b| b.reference.map(|r| (0.5 * (b.low + b.high), r))).collect();
        if !reference.is_empty() {
            chart.draw_series(LineSeries::new(reference, colour(style::PALETTE[2]).stroke_width(style::LINE_WIDTH)))?;
        }
        if let Some(o) = h.observed {
            let p = h.p.map(|p| format!(", p = {}", super::table::p_value(Some(p)))).unwrap_or_default();
            let red = colour(style::FAR_OUT);
            if h.observed_off_scale {
                let (px, py) = chart.backend_coord(&(x1, y_max * 0.8));
                root.draw(&PathElement::new(vec![(px - 40, py), (px, py)], red.stroke_width(2)))?;
                root.draw(&Polygon::new(vec![(px + 6, py), (px - 2, py - 5), (px - 2, py + 5)], red.filled()))?;
                root.draw(&Text::new(
                    format!("observed {stat} = {}{p} (off scale) →", tick(o)),
                    (px - 46, py),
                    anchored(style::REPORT_TICK_SIZE, style::FAR_OUT, HPos::Right, VPos::Center),
                ))?;
            } else {
                chart.draw_series(std::iter::once(PathElement::new(
                    vec![(o, 0.0), (o, y_max * 0.92)],
                    red.stroke_width(2),
                )))?;
                let (px, py) = chart.backend_coord(&(o, y_max * 0.95));
                let text = format!("observed {stat} = {}{p}", tick(o));
                let right =
                    f64::from(px) + style::text_width(&text, style::REPORT_TICK_SIZE) + 6.0 > f64::from(w) - 10.0;
                let (anchor, dx) = if right { (HPos::Right, -6) } else { (HPos::Left, 6) };
                root.draw(&Text::new(
                    text,
                    (px + dx, py),
                    anchored(style::REPORT_TICK_SIZE, style::FAR_OUT, anchor, VPos::Center),
                ))?;
            }
        }
        Ok(())
    });
    Plot {
        file: format!("null-{}-{k}-{}.svg", file_part(&h.engine), file_part(&h.term)),
        title: format!("Permutation null of {stat}: {} ({})", h.term, h.engine),
        caption: format!(
            "Distribution of {stat} for {} over the {} permutations of the {} engine, with the observed value (red){}. The p-value is the share of permuted values at or above the observed one.",
            h.term,
            h.resamples,
            h.engine,
            h.reference.as_ref().map(|r| format!(" and the share each bin gets under {r} (line)")).unwrap_or_default()
        ),
        svg: body,
        engine: Some(h.engine.clone()),
    }
}

fn share_text(s: f64) -> String {
    if s < 0.001 {
        "under 0.1%".into()
    } else {
        format!("{:.1}%", s * 100.0)
    }
}

// ---------------------------------------------------------------- concordance chart

/// Lowest p the concordance axis shows; smaller p-values sit at the edge with a "<".
const P_FLOOR: f64 = 1e-12;

fn concordance(a: &Analysis) -> Plot {
    let terms: Vec<&str> = a.concordance.iter().map(|c| c.term.as_str()).collect();
    let terms: Vec<&str> = if terms.is_empty() {
        a.engines.first().map(|e| e.terms.iter().map(|t| t.term.as_str()).collect()).unwrap_or_default()
    } else {
        terms
    };
    let engines: Vec<&EngineResult> = a.engines.iter().filter(|e| e.terms.iter().any(|t| t.p.is_some())).collect();
    let alpha = a.engines.iter().find_map(|e| e.settings.get("alpha").and_then(|v| v.as_f64())).unwrap_or(0.05);
    let n_e = engines.len().max(1);
    let row_h = (14 * n_e + 18) as u32;
    let term_w = terms.iter().map(|t| style::text_width(t, style::REPORT_TICK_SIZE)).fold(60.0, f64::max).min(220.0);
    let y_area = term_w as u32 + 16;
    let verdict_w = 150u32;
    let width = style::WIDTH + 60;
    let items: Vec<LegendItem> = engines
        .iter()
        .map(|e| LegendItem {
            text: escape::xml_chars(&e.engine),
            colour: style::PALETTE[style::engine_index(&e.engine)],
            marker: Some(style::MARKERS[style::engine_index(&e.engine)]),
            line: false,
        })
        .collect();
    let legend_room = f64::from(width) - 2.0 * f64::from(style::MARGIN);
    let subtitle = vec![
        format!("dashed: α = {alpha}; left of it an engine rejects; bars: 99% Monte Carlo interval of a resampled p"),
        "a thick bar that crosses α is an undetermined decision; verdicts on the right".to_string(),
    ];
    let legend_h = legend_height(&items, legend_room);
    let header = style::MARGIN + 24 + 17 * subtitle.len() as u32 + 6 + legend_h as u32 + 6;
    let height = header + row_h * terms.len().max(1) as u32 + style::X_LABEL_AREA + 2 * style::MARGIN;
    let min_p = engines
        .iter()
        .flat_map(|e| e.terms.iter())
        .flat_map(|t| [t.p, t.mc.as_ref().map(|m| m.ci_low)])
        .flatten()
        .filter(|p| *p > 0.0)
        .fold(1.0f64, f64::min);
    let lower = 10f64.powf((min_p.max(P_FLOOR).log10() - 0.5).floor()).min(alpha / 10.0).max(P_FLOOR);
    let body = svg(width, height, |root| {
        let top = heading(root, "p-values of every engine for every term", &subtitle)?;
        draw_legend(root, &items, style::MARGIN as i32, top, legend_room)?;
        let area = root.margin(header, style::MARGIN, 0, 0);
        let n_t = terms.len().max(1);
        let mut chart = ChartBuilder::on(&area)
            .margin(style::MARGIN)
            .margin_right(verdict_w)
            .x_label_area_size(style::X_LABEL_AREA)
            .y_label_area_size(y_area)
            .build_cartesian_2d((lower..1.0f64).log_scale(), 0f64..n_t as f64)?;
        chart
            .configure_mesh()
            .disable_y_mesh()
            .light_line_style(TRANSPARENT)
            .bold_line_style(colour(style::GRID))
            .y_labels(0)
            .x_labels(8)
            .x_label_formatter(&|v| p_tick(*v))
            .x_desc("p (log scale)")
            .label_style(font(style::REPORT_TICK_SIZE, style::INK))
            .axis_desc_style(font(style::REPORT_LABEL_SIZE, style::INK))
            .draw()?;
        chart.draw_series(DashedLineSeries::new(
            vec![(alpha, 0.0), (alpha, n_t as f64)],
            6,
            4,
            colour(style::REFERENCE).stroke_width(2),
        ))?;
        for (ti, term) in terms.iter().enumerate() {
            // Row ti from the top: y runs up, so the first term sits at the top.
            let row_top = (n_t - ti) as f64;
            if ti > 0 {
                chart.draw_series(std::iter::once(PathElement::new(
                    vec![(lower, row_top), (1.0, row_top)],
                    colour(style::GRID).stroke_width(1),
                )))?;
            }
            let (_, ty) = chart.backend_coord(&(lower, row_top - 0.5));
            root.draw(&Text::new(
                label(term, term_w, style::REPORT_TICK_SIZE),
                (style::MARGIN as i32 + y_area as i32 - 8, ty),
                anchored(style::REPORT_TICK_SIZE, style::INK, HPos::Right, VPos::Center),
            ))?;
            if let Some(c) = a.concordance.iter().find(|c| c.term == *term) {
                let (rx, _) = chart.backend_coord(&(1.0, row_top - 0.5));
                root.draw(&Text::new(
                    verdict_text(c.verdict),
                    (rx + 12, ty),
                    anchored(style::REPORT_TICK_SIZE, style::INK, HPos::Left, VPos::Center),
                ))?;
            }
            for (ei, e) in engines.iter().enumerate() {
                let Some(r) = e.terms.iter().find(|r| r.term == *term) else {
                    continue;
                };
                let y = row_top - (ei as f64 + 1.0) / (n_e as f64 + 1.0);
                let slot = style::engine_index(&e.engine);
                let c = colour(style::PALETTE[slot]);
                if let Some(mc) = &r.mc {
                    if !mc.exact {
                        let (l, h) = (mc.ci_low.max(lower), mc.ci_high.clamp(lower, 1.0));
                        let thick = if r.decision == Some(Decision::Undetermined) { 4 } else { 2 };
                        chart.draw_series(std::iter::once(PathElement::new(
                            vec![(l, y), (h, y)],
                            c.stroke_width(thick),
                        )))?;
                    }
                }
                if let Some(p) = r.p {
                    let shown = p.clamp(lower, 1.0);
                    let at = chart.backend_coord(&(shown, y));
                    marker(root, at, style::MARKERS[slot], c, style::MARKER_SIZE as i32)?;
                    if p < lower {
                        root.draw(&Text::new(
                            "<",
                            (at.0 - 10, at.1),
                            anchored(style::REPORT_TICK_SIZE, style::INK, HPos::Right, VPos::Center),
                        ))?;
                    }
                }
            }
        }
        Ok(())
    });
    Plot {
        file: "concordance.svg".into(),
        title: "Concordance: every engine's p".into(),
        caption: format!(
            "Each engine's p-value for each term on a log scale, with α = {alpha} dashed: markers left of it reject. A resampled p carries its 99% Monte Carlo interval; an interval that crosses α leaves that engine undetermined (thick bar). p-values below {} sit at the left edge, marked <.",
            p_tick(lower)
        ),
        svg: body,
        engine: None,
    }
}

fn verdict_text(v: crate::results::Verdict) -> String {
    use crate::results::Verdict::*;
    match v {
        Holds => "holds",
        NullHolds => "null holds",
        MethodDependent => "method-dependent",
        Undetermined => "undetermined",
    }
    .to_string()
}

fn p_tick(v: f64) -> String {
    let e = v.log10();
    if (e - e.round()).abs() > 1e-6 {
        return String::new();
    }
    let e = e.round() as i32;
    match e {
        0 => "1".into(),
        -1 => "0.1".into(),
        -2 => "0.01".into(),
        -3 => "0.001".into(),
        e => format!("1e{e}"),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ticks_and_file_names() {
        assert_eq!(tick(12.5), "12.5");
        assert_eq!(tick(0.0), "0");
        assert_eq!(tick(1234.5678), "1235");
        assert_eq!(p_tick(0.01), "0.01");
        assert_eq!(p_tick(1e-6), "1e-6");
        assert_eq!(p_tick(0.05), "");
        assert_eq!(file_part("a:b<c>"), "a_b_c_");
        assert_eq!(file_part(""), "term");
        assert!(jitter(0) >= -0.5 && jitter(0) < 0.5);
    }
}
