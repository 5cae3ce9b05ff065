//! The HTML report: one self-contained page a reviewer reads top to bottom — data and
//! design, diagnostics with plots, the concordance (table and chart), effect sizes with
//! intervals, engine details, follow-ups, cautions, reproducibility.
//!
//! Self-contained means inline CSS and inline SVG, no scripts, no fonts or anything
//! else from the network; a Content-Security-Policy meta tag (`default-src 'none'`)
//! makes a browser refuse any such load, so a slip shows as a console error in the
//! browser check instead of a silent fetch. The page is written to parse as XML too
//! (every element closed, every attribute quoted), which lets tests check its structure
//! with an XML parser.
//!
//! Every user-supplied string (file names, column names, level labels, cell names, and
//! messages that quote them) passes through [`super::escape::html`]; the SVG plots come from
//! [`super::plots`], which makes their text safe in the same way. The renderer reads the
//! [`Analysis`] and formats; it computes nothing.

use super::escape::html as esc;
use super::plots::Plot;
use super::table::{num, p_value};
use super::Render;
use crate::results::{Analysis, Concordance, Decision, Details, EngineResult, Verdict};
use std::fmt::Write as _;
use std::io::{self, Write};

/// The HTML renderer.
pub struct Html<'a> {
    /// The plots to embed (from [`super::plots::all`]); each appears once, in its section.
    pub plots: &'a [Plot],
}

/// The page's CSS: quorum's own layout (system fonts only).
const CSS: &str = r#"
:root { --ink: #222222; --muted: #5d5d5d; --rule: #d8d8d8; --accent: #1b4f9c; --band: #f3f6fb; }
* { box-sizing: border-box; }
body { margin: 0; color: var(--ink); background: #ffffff;
  font: 15px/1.5 system-ui, "Segoe UI", "DejaVu Sans", "Liberation Sans", Arial, sans-serif; }
header.top { background: var(--accent); color: #ffffff; padding: 20px 32px 16px; }
header.top h1 { margin: 0 0 4px; font-size: 24px; font-weight: 600; }
header.top p { margin: 0; opacity: 0.92; }
nav.contents { padding: 10px 32px; background: var(--band); border-bottom: 1px solid var(--rule); font-size: 14px; }
nav.contents a { color: var(--accent); margin-right: 16px; text-decoration: none; white-space: nowrap; }
main { max-width: 1180px; padding: 8px 32px 40px; }
section { margin-top: 28px; }
h2 { font-size: 21px; border-bottom: 2px solid var(--accent); padding-bottom: 4px; margin: 0 0 12px; }
h3 { font-size: 17px; margin: 22px 0 8px; }
p.lead { color: var(--muted); margin-top: 0; }
table { border-collapse: collapse; margin: 8px 0 16px; font-size: 14px; }
th, td { padding: 4px 10px; border-bottom: 1px solid var(--rule); text-align: left; vertical-align: top; }
th { background: var(--band); font-weight: 600; }
td.n, th.n { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
div.scroll { overflow-x: auto; max-width: 100%; }
td.label { overflow-wrap: break-word; min-width: 6em; }
figure { margin: 12px 0 24px; max-width: 100%; }
figure svg { width: 100%; max-width: 980px; height: auto; border: 1px solid var(--rule); }
figcaption { color: var(--muted); font-size: 14px; max-width: 62em; margin-top: 4px; }
.verdict { display: inline-block; white-space: nowrap; padding: 1px 8px; border-radius: 3px; font-weight: 600; font-size: 13px; border: 1px solid; }
.v-holds { background: #dff1ee; border-color: #0f8f7e; }
.v-null-holds { background: #ececec; border-color: #4d4d4d; }
.v-method-dependent { background: #fbecd3; border-color: #e3901b; }
.v-undetermined { background: #f1e3ef; border-color: #a3559a; }
ul.flags li { margin-bottom: 4px; }
code, .code { font-family: "DejaVu Sans Mono", "Liberation Mono", Consolas, monospace; font-size: 13px; overflow-wrap: anywhere; }
.flagcode { color: var(--muted); font-size: 13px; }
dl.facts { display: grid; grid-template-columns: max-content 1fr; gap: 2px 16px; margin: 8px 0 16px; }
dl.facts dt { font-weight: 600; }
dl.facts dd { margin: 0; overflow-wrap: anywhere; }
.write-up p { max-width: 62em; }
h4 { font-size: 15px; margin: 18px 0 6px; }
.warn { color: #8a4b00; font-weight: 600; }
.muted { color: var(--muted); }
.v-word { font-weight: 600; padding: 0 4px; border-radius: 3px; white-space: nowrap; }
p.lines { font-size: 14px; }
pre { font-family: "DejaVu Sans Mono", "Liberation Mono", Consolas, monospace; font-size: 12px; line-height: 1.35;
  background: var(--band); border: 1px solid var(--rule); padding: 8px 10px; overflow-x: auto; max-width: 100%; }
footer { color: var(--muted); font-size: 13px; padding: 16px 32px 32px; border-top: 1px solid var(--rule); }
"#;

/// Section ids and titles, in page order (the contents bar and the tests use them).
pub const SECTIONS: [(&str, &str); 9] = [
    ("data", "Data and design"),
    ("diagnostics", "Diagnostics"),
    ("concordance", "Concordance"),
    ("effects", "Effect sizes"),
    ("followup", "Follow-ups"),
    ("paper", "For the paper"),
    ("engines", "Engine details"),
    ("cautions", "Cautions"),
    ("reproducibility", "Reproducibility"),
];

impl Render for Html<'_> {
    fn render(&self, a: &Analysis, out: &mut dyn Write) -> io::Result<()> {
        let mut page = String::with_capacity(1 << 16);
        // Writing into a String cannot fail.
        let _ = self.page(a, &mut page);
        out.write_all(page.as_bytes())
    }
}

type W = std::fmt::Result;

impl Html<'_> {
    fn plot(&self, file: &str) -> Option<&Plot> {
        self.plots.iter().find(|p| p.file == file)
    }

    fn page(&self, a: &Analysis, s: &mut String) -> W {
        let d = &a.design;
        let factors: Vec<&str> = d.factors.iter().map(|f| f.name.as_str()).collect();
        let title = format!("{} by {}", d.outcome, factors.join(" × "));
        writeln!(s, "<!DOCTYPE html>")?;
        writeln!(s, "<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\"/>")?;
        writeln!(s, "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\"/>")?;
        writeln!(
            s,
            "<meta http-equiv=\"Content-Security-Policy\" content=\"default-src 'none'; style-src 'unsafe-inline'\"/>"
        )?;
        writeln!(s, "<meta name=\"generator\" content=\"quorum {}\"/>", esc(&a.reproducibility.version))?;
        writeln!(s, "<title>quorum report: {}</title>", esc(&title))?;
        writeln!(s, "<style>{CSS}</style>\n</head>\n<body>")?;
        writeln!(s, "<header class=\"top\">")?;
        writeln!(s, "<h1>{}</h1>", esc(&title))?;
        let kind = if a.engines.is_empty() { "description" } else { "analysis" };
        writeln!(
            s,
            "<p>Between-subjects factorial {kind} by quorum {}: {} engine(s) on {} term(s), α = {}.</p>",
            esc(&a.reproducibility.version),
            a.engines.len(),
            a.concordance.len(),
            alpha(a)
        )?;
        writeln!(s, "</header>")?;
        write!(s, "<nav class=\"contents\">")?;
        for (id, name) in SECTIONS {
            write!(s, "<a href=\"#{id}\">{name}</a>")?;
        }
        writeln!(s, "</nav>\n<main>")?;
        self.data(a, s)?;
        self.diagnostics(a, s)?;
        self.concordance(a, s)?;
        self.effects(a, s)?;
        followups(a, s)?;
        paper(a, s)?;
        self.engines(a, s)?;
        cautions(a, s)?;
        reproducibility(a, s)?;
        writeln!(s, "</main>")?;
        writeln!(
            s,
            "<footer>Written by quorum {}. Every number on this page is in <code>results.json</code> beside it; the plots are also in <code>plots/</code>.</footer>",
            esc(&a.reproducibility.version)
        )?;
        writeln!(s, "</body>\n</html>")
    }

    fn figure(&self, file: &str, s: &mut String) -> W {
        let Some(p) = self.plot(file) else {
            return Ok(());
        };
        let id = format!("plot-{}", p.file.trim_end_matches(".svg"));
        writeln!(s, "<figure id=\"{}\">", esc(&id))?;
        // The SVG is well-formed XML without a prolog; give it a role and a label.
        let body = p.svg.trim_start();
        let body =
            body.strip_prefix("<?xml").and_then(|r| r.split_once("?>")).map(|(_, r)| r.trim_start()).unwrap_or(body);
        match body.strip_prefix("<svg") {
            Some(rest) => writeln!(s, "<svg role=\"img\" aria-label=\"{}\"{rest}", esc(&p.title))?,
            None => writeln!(s, "{body}")?,
        }
        writeln!(
            s,
            "<figcaption>{} <span class=\"flagcode\">(plots/{})</span></figcaption>",
            esc(&p.caption),
            esc(&p.file)
        )?;
        writeln!(s, "</figure>")
    }

    fn data(&self, a: &Analysis, s: &mut String) -> W {
        let d = &a.design;
        writeln!(s, "<section id=\"data\">\n<h2>Data and design</h2>")?;
        writeln!(s, "<dl class=\"facts\">")?;
        writeln!(s, "<dt>Data</dt><dd><code>{}</code></dd>", esc(&a.input.path))?;
        writeln!(s, "<dt>Outcome</dt><dd>{}</dd>", esc(&d.outcome))?;
        writeln!(s, "<dt>Rows</dt><dd>{} read, {} used{}</dd>", a.input.rows_read, a.input.rows_used, dropped_text(a))?;
        let ns: Vec<usize> = d.cells.iter().map(|c| c.n).collect();
        let (lo, hi) = (ns.iter().min().copied().unwrap_or(0), ns.iter().max().copied().unwrap_or(0));
        let balance = if d.balanced {
            format!("balanced, n = {lo} per cell")
        } else {
            format!("unbalanced, n from {lo} to {hi}")
        };
        writeln!(s, "<dt>Cells</dt><dd>{} ({balance})</dd>", d.cells.len())?;
        writeln!(s, "</dl>")?;
        writeln!(
            s,
            "<table class=\"factors\">\n<tr><th>factor</th><th>levels, in analysis order</th><th>kind</th></tr>"
        )?;
        for f in &d.factors {
            let levels: Vec<String> = f.levels.iter().map(|l| esc(l)).collect();
            writeln!(
                s,
                "<tr><td class=\"label\">{}</td><td class=\"label\">{}</td><td>{}</td></tr>",
                esc(&f.name),
                levels.join(" &lt; "),
                if f.measured { "measured" } else { "manipulated" }
            )?;
        }
        writeln!(s, "</table>")?;
        if let Some(first) = d.cells.first() {
            let level = first.mean_ci.map(|i| i.level).unwrap_or(0.95);
            writeln!(
                s,
                "<h3>Cells</h3>\n<p class=\"lead\">Mean with its {}% t interval from the cell's own standard deviation; trimmed mean and winsorized sd at {}% trimming.</p>",
                pct(level),
                pct(first.trim)
            )?;
            writeln!(s, "<div class=\"scroll\"><table class=\"cells\">\n<tr>")?;
            for f in &d.factors {
                write!(s, "<th>{}</th>", esc(&f.name))?;
            }
            for h in
                ["n", "mean", "interval", "sd", "median", "trimmed", "wins. sd", "skew G1", "kurt G2", "min", "max"]
            {
                write!(s, "<th class=\"n\">{h}</th>")?;
            }
            writeln!(s, "</tr>")?;
            for c in &d.cells {
                write!(s, "<tr>")?;
                for l in &c.levels {
                    write!(s, "<td class=\"label\">{}</td>", esc(l))?;
                }
                for v in super::sections::cell_numbers(c) {
                    write!(s, "<td class=\"n\">{}</td>", esc(&v))?;
                }
                writeln!(s, "</tr>")?;
            }
            writeln!(s, "</table></div>")?;
        }
        if !d.marginal_means.is_empty() {
            writeln!(
                s,
                "<h3>Marginal means</h3>\n<p class=\"lead\">Unweighted: the average of the cell means (what Type III tests compare). Weighted: the average of the observations. t intervals with the pooled error.</p>"
            )?;
            writeln!(s, "<div class=\"scroll\"><table class=\"marginal\">\n<tr><th>factor</th><th>level</th><th class=\"n\">n</th><th class=\"n\">unweighted</th><th class=\"n\">interval</th><th class=\"n\">weighted</th><th class=\"n\">interval</th></tr>")?;
            for m in &d.marginal_means {
                writeln!(
                    s,
                    "<tr><td class=\"label\">{}</td><td class=\"label\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td></tr>",
                    esc(&m.factor),
                    esc(&m.level),
                    m.n,
                    num(Some(m.unweighted_mean), 4),
                    super::sections::interval(&m.unweighted_ci, 4),
                    num(Some(m.weighted_mean), 4),
                    super::sections::interval(&m.weighted_ci, 4)
                )?;
            }
            writeln!(s, "</table></div>")?;
        }
        writeln!(s, "<h3>What the cell means look like</h3>")?;
        self.figure("interaction.svg", s)?;
        writeln!(s, "</section>")
    }

    fn diagnostics(&self, a: &Analysis, s: &mut String) -> W {
        let g = &a.diagnostics;
        writeln!(s, "<section id=\"diagnostics\">\n<h2>Diagnostics</h2>")?;
        writeln!(
            s,
            "<p class=\"lead\">What the data look like against the classical assumptions. Diagnostics describe; they decide no verdict. A flag fires only when a statistic is beyond what normal, equal-variance data with these cell sizes produce.</p>"
        )?;
        writeln!(s, "<h3>Flags</h3>")?;
        if g.flags.is_empty() {
            writeln!(
                s,
                "<p>No flag: nothing here is unusual for normal, equal-variance data with these cell sizes.</p>"
            )?;
        } else {
            writeln!(s, "<ul class=\"flags\">")?;
            for f in &g.flags {
                writeln!(s, "<li>{} <span class=\"flagcode\">[{}]</span></li>", esc(&f.message), esc(&f.code))?;
            }
            writeln!(s, "</ul>")?;
        }
        self.figure("cells.svg", s)?;
        self.figure("residual-qq.svg", s)?;
        self.figure("residuals-fitted.svg", s)?;
        writeln!(s, "<h3>Spread and balance</h3>\n<table class=\"checks\">")?;
        writeln!(
            s,
            "<tr><th>check</th><th class=\"n\">statistic</th><th class=\"n\">df</th><th class=\"n\">p</th></tr>"
        )?;
        for (name, t) in [("Levene (mean-centred)", &g.levene), ("Brown–Forsythe (median-centred)", &g.brown_forsythe)]
        {
            match t {
                Some(t) => writeln!(
                    s,
                    "<tr><td>{name}</td><td class=\"n\">F = {}</td><td class=\"n\">{}, {}</td><td class=\"n\">{}</td></tr>",
                    num(Some(t.f), 4),
                    df(Some(t.df1)),
                    df(Some(t.df2)),
                    p_value(Some(t.p))
                )?,
                None => writeln!(s, "<tr><td>{name}</td><td class=\"n\">—</td><td class=\"n\">—</td><td class=\"n\">—</td></tr>")?,
            }
        }
        if let Some(sw) = &g.shapiro_wilk {
            writeln!(
                s,
                "<tr><td>Shapiro–Wilk, pooled residuals</td><td class=\"n\">W = {}</td><td class=\"n\"></td><td class=\"n\">{}</td></tr>",
                num(Some(sw.w), 4),
                p_value(Some(sw.p))
            )?;
        }
        for (name, v) in [
            ("largest/smallest cell variance", g.variance_ratio),
            ("largest/smallest cell MADN² (resistant to outliers)", g.robust_variance_ratio),
            ("largest/smallest cell size", Some(g.n_ratio)),
            ("Spearman correlation of cell size with variance", g.n_variance_spearman),
        ] {
            writeln!(
                s,
                "<tr><td>{name}</td><td class=\"n\">{}</td><td class=\"n\"></td><td class=\"n\"></td></tr>",
                num(v, 3)
            )?;
        }
        if let Some(r) = &g.residuals {
            writeln!(
                s,
                "<tr><td>pooled residuals (N = {}): skewness G1 ± SE</td><td class=\"n\">{}</td><td class=\"n\"></td><td class=\"n\"></td></tr>",
                r.n,
                plus_minus(r.skewness, r.skewness_se)
            )?;
            writeln!(
                s,
                "<tr><td>pooled residuals: excess kurtosis G2 ± SE</td><td class=\"n\">{}</td><td class=\"n\"></td><td class=\"n\"></td></tr>",
                plus_minus(r.excess_kurtosis, r.excess_kurtosis_se)
            )?;
        }
        writeln!(s, "</table>")?;
        if let Some(c) = &g.calibration {
            writeln!(
                s,
                "<h3>Calibrated checks</h3>\n<p class=\"lead\">{} A flag needs p ≤ {}.</p>",
                esc(&c.method),
                c.level
            )?;
            writeln!(s, "<div class=\"scroll\"><table class=\"calibrated\">\n<tr><th>statistic</th><th class=\"n\">observed</th><th class=\"n\">normal data: median</th><th class=\"n\">p</th><th>flag</th></tr>")?;
            for k in &c.checks {
                writeln!(
                    s,
                    "<tr><td>{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td>{}</td></tr>",
                    esc(&k.description),
                    count_or_num(k.value),
                    count_or_num(k.null_median),
                    p_value(k.null_p),
                    if k.flagged { "yes" } else { "" }
                )?;
            }
            writeln!(s, "</table></div>")?;
        }
        writeln!(s, "<h3>Cells: robust spread and outlying points</h3>")?;
        writeln!(s, "<p class=\"lead\">Quartiles: {}.</p>", esc(&g.quantile_definition))?;
        writeln!(s, "<div class=\"scroll\"><table class=\"cell-diagnostics\">\n<tr><th>cell</th><th class=\"n\">n</th><th class=\"n\">Q1</th><th class=\"n\">Q3</th><th class=\"n\">MADN</th><th class=\"n\">beyond 1.5 IQR</th><th class=\"n\">beyond 3 IQR</th><th class=\"n\">MAD rule</th></tr>")?;
        for c in &g.cells {
            writeln!(
                s,
                "<tr><td class=\"label\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td></tr>",
                esc(&c.cell),
                c.n,
                num(c.q1, 4),
                num(c.q3, 4),
                num(c.madn, 3),
                c.outside,
                c.far_out,
                c.mad_median.map(|m| m.to_string()).unwrap_or_else(|| "—".into())
            )?;
        }
        writeln!(s, "</table></div>")?;
        if !g.outliers.is_empty() {
            // One row per input line, with every rule that flags it (the results list
            // one entry per rule).
            let mut rows: Vec<(u64, &str, f64, Vec<&str>)> = Vec::new();
            for o in &g.outliers {
                match rows.iter_mut().find(|r| r.0 == o.line) {
                    Some(r) => r.3.push(rule_name(&o.rule)),
                    None => rows.push((o.line, &o.cell, o.value, vec![rule_name(&o.rule)])),
                }
            }
            rows.sort_by_key(|r| r.0);
            writeln!(s, "<p>Outlying points by input line (information: single points decide nothing).</p>")?;
            writeln!(s, "<div class=\"scroll\"><table class=\"outliers\">\n<tr><th class=\"n\">line</th><th>cell</th><th class=\"n\">value</th><th>rules</th></tr>")?;
            for (line, cell, value, rules) in rows {
                writeln!(
                    s,
                    "<tr><td class=\"n\">{line}</td><td class=\"label\">{}</td><td class=\"n\">{}</td><td>{}</td></tr>",
                    esc(cell),
                    value_text_f64(value),
                    rules.join(", ")
                )?;
            }
            writeln!(s, "</table></div>")?;
        }
        if !g.notes.is_empty() {
            writeln!(s, "<ul class=\"notes\">")?;
            for n in &g.notes {
                writeln!(s, "<li>{}</li>", esc(n))?;
            }
            writeln!(s, "</ul>")?;
        }
        writeln!(s, "</section>")
    }

    fn concordance(&self, a: &Analysis, s: &mut String) -> W {
        writeln!(s, "<section id=\"concordance\">\n<h2>Concordance</h2>")?;
        if a.concordance.is_empty() {
            writeln!(s, "<p>No tests were run (description only).</p>\n</section>")?;
            return Ok(());
        }
        writeln!(
            s,
            "<p class=\"lead\">Does each conclusion survive a change of method? Every engine tests the same Type III hypothesis of each term. <em>holds</em>: every engine that decided rejects; <em>null holds</em>: every engine that decided retains; <em>method-dependent</em>: they disagree; <em>undetermined</em>: no engine could decide.</p>"
        )?;
        // Each engine's p and decision, the primary engine and why, and what goes with
        // the disagreements: the same blocks as the text and Markdown reports.
        let mut blocks = Vec::new();
        super::sections::concordance(a, &mut blocks);
        super::doc::write_html(without_heading(&blocks), s);
        writeln!(s, "<h4>Which engines agree with the primary engine's decision</h4>")?;
        concordance_table(&a.concordance, s)?;
        self.figure("concordance.svg", s)?;
        for v in &a.sensitivity {
            writeln!(s, "<h3>Without flagged points (sensitivity variant, descriptive)</h3>")?;
            writeln!(s, "<p>{}</p>", esc(&v.description))?;
            let lines: Vec<String> = v.rows_removed.iter().map(|l| l.to_string()).collect();
            writeln!(
                s,
                "<p>Rule <code>{}</code>; input lines removed: {}.</p>",
                esc(&v.rule),
                if lines.is_empty() { "none".to_string() } else { lines.join(", ") }
            )?;
            if !v.concordance.is_empty() {
                writeln!(s, "<div class=\"scroll\"><table class=\"sensitivity\">\n<tr><th>term</th><th>all data</th><th>without the removed lines</th></tr>")?;
                for c in &v.concordance {
                    let main =
                        a.concordance.iter().find(|m| m.term == c.term).map(|m| badge(m.verdict)).unwrap_or_default();
                    writeln!(
                        s,
                        "<tr><td class=\"label\">{}</td><td>{main}</td><td>{}</td></tr>",
                        esc(&c.term),
                        badge(c.verdict)
                    )?;
                }
                writeln!(s, "</table></div>")?;
            }
            for n in &v.notes {
                writeln!(s, "<p class=\"flagcode\">{}</p>", esc(n))?;
            }
        }
        writeln!(s, "</section>")
    }

    fn effects(&self, a: &Analysis, s: &mut String) -> W {
        writeln!(s, "<section id=\"effects\">\n<h2>Effect sizes</h2>")?;
        let any = a.engines.iter().any(|e| e.terms.iter().any(|t| !t.effects.is_empty()));
        if !any {
            writeln!(s, "<p>No engine reported an effect size.</p>\n</section>")?;
            return Ok(());
        }
        writeln!(s, "<p class=\"lead\">Every effect size each engine reports, by term, with its interval where the engine has one.</p>")?;
        writeln!(s, "<div class=\"scroll\"><table class=\"effects\">\n<tr><th>term</th><th>engine</th><th>effect size</th><th class=\"n\">estimate</th><th class=\"n\">interval</th><th class=\"n\">level</th></tr>")?;
        let terms: Vec<&str> = match a.engines.first() {
            Some(e) => e.terms.iter().map(|t| t.term.as_str()).collect(),
            None => Vec::new(),
        };
        for term in terms {
            for e in &a.engines {
                let Some(r) = e.terms.iter().find(|r| r.term == term) else {
                    continue;
                };
                for x in &r.effects {
                    let ci = match (x.ci_low, x.ci_high) {
                        (Some(l), Some(h)) => format!("[{}, {}]", num(Some(l), 3), num(Some(h), 3)),
                        _ => "—".into(),
                    };
                    writeln!(
                        s,
                        "<tr><td class=\"label\">{}</td><td>{}</td><td>{}</td><td class=\"n\">{}</td><td class=\"n\">{ci}</td><td class=\"n\">{}</td></tr>",
                        esc(term),
                        esc(&e.engine),
                        esc(&x.name.replace('_', " ")),
                        num(x.value, 3),
                        x.ci_level.map(|l| format!("{}%", pct(l))).unwrap_or_default()
                    )?;
                }
            }
        }
        writeln!(s, "</table></div>\n</section>")
    }

    fn engines(&self, a: &Analysis, s: &mut String) -> W {
        writeln!(s, "<section id=\"engines\">\n<h2>Engine details</h2>")?;
        if a.engines.is_empty() {
            writeln!(s, "<p>No engine ran (description only).</p>")?;
        }
        for e in &a.engines {
            writeln!(s, "<h3 id=\"engine-{}\">{}</h3>", esc(&e.engine), esc(&e.engine))?;
            engine_table(e, s)?;
            match &e.details {
                Some(Details::Classical { anova, .. }) => {
                    writeln!(s, "<p>ANOVA table, Type {} sums of squares (sum-to-zero coding).</p>", anova.ss_type)?;
                    writeln!(s, "<div class=\"scroll\"><table class=\"anova\">\n<tr><th>source</th><th class=\"n\">SS</th><th class=\"n\">df</th><th class=\"n\">MS</th><th class=\"n\">F</th><th class=\"n\">p</th></tr>")?;
                    for r in &anova.rows {
                        writeln!(
                            s,
                            "<tr><td class=\"label\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td></tr>",
                            esc(&r.source),
                            num(Some(r.ss), 5),
                            r.df,
                            num(r.ms, 5),
                            num(r.f, 4),
                            p_value(r.p)
                        )?;
                    }
                    writeln!(s, "</table></div>")?;
                }
                Some(Details::Trimmed { trim, reference, terms: rows, .. }) => {
                    writeln!(s, "<p>Johansen's Welch–James test on {}% trimmed means; decisions from the <code>{}</code> reference.</p>", pct(*trim), esc(reference))?;
                    writeln!(s, "<div class=\"scroll\"><table class=\"welch-james\">\n<tr><th>term</th><th class=\"n\">Q</th><th class=\"n\">c_J</th><th class=\"n\">F_WJ</th><th class=\"n\">df1</th><th class=\"n\">ν₂</th><th class=\"n\">p (F)</th><th class=\"n\">p (adj. χ²)</th><th class=\"n\">p (bootstrap)</th></tr>")?;
                    for r in rows {
                        writeln!(
                            s,
                            "<tr><td class=\"label\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td></tr>",
                            esc(&r.term),
                            num(r.q_stat, 4),
                            num(r.c_j, 4),
                            num(r.f, 4),
                            df(r.df1),
                            num(r.df2, 4),
                            p_value(r.p_f),
                            p_value(r.p_adjusted),
                            p_value(r.p_bootstrap)
                        )?;
                    }
                    writeln!(s, "</table></div>")?;
                }
                Some(Details::Art(d)) => {
                    writeln!(
                        s,
                        "<p>{}. Outcome ties: {} distinct values among {}.</p>",
                        esc(&d.alignment),
                        d.outcome_ties.distinct,
                        d.outcome_ties.n
                    )?;
                }
                Some(Details::RankAts(d)) => {
                    writeln!(s, "<p>Relative effects ({}; against {}).</p>", esc(&d.ranks), esc(&d.reference))?;
                    writeln!(s, "<div class=\"scroll\"><table class=\"relative-effects\">\n<tr><th>cell</th><th class=\"n\">n</th><th class=\"n\">relative effect</th></tr>")?;
                    for r in &d.relative_effects {
                        writeln!(
                            s,
                            "<tr><td class=\"label\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td></tr>",
                            esc(&r.levels.join(", ")),
                            r.n,
                            num(r.value, 3)
                        )?;
                    }
                    writeln!(s, "</table></div>")?;
                }
                Some(Details::Permutation { .. }) => {
                    for p in self.plots.iter().filter(|p| p.engine.as_deref() == Some(e.engine.as_str())) {
                        self.figure(&p.file, s)?;
                    }
                }
                Some(Details::Bootstrap(_)) => {
                    // The intervals table as the text report lays it out (many columns).
                    writeln!(s, "<p>Wild-bootstrap test and stratified bootstrap intervals (descriptive).</p>")?;
                    let text = super::capture(|out| super::text::engine(e, out));
                    writeln!(s, "<pre>{}</pre>", esc(&text))?;
                }
                None => {}
            }
            if !e.notes.is_empty() {
                writeln!(s, "<ul class=\"notes\">")?;
                for n in &e.notes {
                    writeln!(s, "<li>{}</li>", esc(n))?;
                }
                writeln!(s, "</ul>")?;
            }
            let settings: Vec<String> =
                e.settings.iter().map(|(k, v)| format!("{} = {}", esc(k), esc(&setting_text(v)))).collect();
            writeln!(s, "<p class=\"flagcode\">settings: {}</p>", settings.join("; "))?;
        }
        if let Some(c) = &a.calibration {
            writeln!(s, "<h3>Calibration on data like these</h3>")?;
            writeln!(s, "<p>Each engine's rejection rate under its own null hypothesis on simulated data shaped like these ({} datasets, α = {}).</p>", c.sims, num(Some(c.alpha), 3))?;
            let rows: Vec<serde_json::Value> = c.rows.iter().filter_map(|r| serde_json::to_value(r).ok()).collect();
            json_table(&rows, "calibration", s)?;
            for f in c.flags.iter().chain(&c.notes) {
                writeln!(s, "<p class=\"flagcode\">{}</p>", esc(f))?;
            }
        }
        writeln!(s, "</section>")
    }
}

fn alpha(a: &Analysis) -> f64 {
    a.engines.iter().find_map(|e| e.settings.get("alpha").and_then(|v| v.as_f64())).unwrap_or(0.05)
}

/// Degrees of freedom: whole numbers without decimals.
fn df(x: Option<f64>) -> String {
    match x {
        Some(v) if v.fract() == 0.0 && v.abs() < 1e15 => format!("{v:.0}"),
        other => num(other, 4),
    }
}

/// Counts as whole numbers, other values with 3 significant digits.
fn count_or_num(x: Option<f64>) -> String {
    match x {
        Some(v) if v.fract() == 0.0 && v.abs() < 1e6 => format!("{v:.0}"),
        other => num(other, 3),
    }
}

/// A data value with up to 8 significant digits and no trailing zeros.
fn value_text_f64(x: f64) -> String {
    let s = num(Some(x), 8);
    if s.contains('.') && !s.contains('e') {
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        s
    }
}

/// A setting as written in results.json (numbers in their shortest form).
fn setting_text(v: &serde_json::Value) -> String {
    match v {
        serde_json::Value::String(s) => s.clone(),
        other => other.to_string(),
    }
}

fn pct(x: f64) -> String {
    num(Some((x * 1000.0).round() / 10.0), 3).trim_end_matches(".0").to_string()
}

fn plus_minus(v: Option<f64>, se: Option<f64>) -> String {
    match (v, se) {
        (Some(v), Some(e)) => format!("{} ± {}", num(Some(v), 3), num(Some(e), 2)),
        (v, _) => num(v, 3),
    }
}

fn dropped_text(a: &Analysis) -> String {
    let d = &a.input.dropped;
    if d.is_empty() {
        return String::new();
    }
    let lines: Vec<String> = d.iter().take(30).map(|x| x.line.to_string()).collect();
    let more = if d.len() > 30 { ", …" } else { "" };
    format!("; {} dropped for missing values (lines {}{more})", d.len(), lines.join(", "))
}

fn rule_name(id: &str) -> &'static str {
    match id {
        "tukey-1.5" => "beyond 1.5 × IQR",
        "tukey-3" => "beyond 3 × IQR (far out)",
        "mad-median" => "MAD–median rule",
        _ => "other rule",
    }
}

fn badge(v: Verdict) -> String {
    format!("<span class=\"verdict {}\">{}</span>", super::doc::verdict_class(v), v.words())
}

fn list(v: &[String]) -> String {
    if v.is_empty() {
        "—".into()
    } else {
        v.iter().map(|x| esc(x)).collect::<Vec<_>>().join(", ")
    }
}

fn concordance_table(rows: &[Concordance], s: &mut String) -> W {
    writeln!(s, "<div class=\"scroll\"><table class=\"verdicts\">\n<tr><th>term</th><th>verdict</th><th>agreeing</th><th>dissenting</th><th>undetermined</th><th>could not run</th></tr>")?;
    for c in rows {
        writeln!(
            s,
            "<tr><td class=\"label\">{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td></tr>",
            esc(&c.term),
            badge(c.verdict),
            list(&c.agreeing),
            list(&c.dissenting),
            list(&c.undetermined),
            list(&c.not_applicable)
        )?;
    }
    writeln!(s, "</table></div>")
}

fn engine_table(e: &EngineResult, s: &mut String) -> W {
    writeln!(s, "<div class=\"scroll\"><table class=\"engine-terms\">\n<tr><th>term</th><th class=\"n\">statistic</th><th class=\"n\">df1</th><th class=\"n\">df2</th><th class=\"n\">p</th><th>decision</th><th>resampling</th></tr>")?;
    for r in &e.terms {
        if let Some(why) = &r.not_applicable {
            writeln!(
                s,
                "<tr><td class=\"label\">{}</td><td colspan=\"6\">could not run: {}</td></tr>",
                esc(&r.term),
                esc(why)
            )?;
            continue;
        }
        let decision = Decision::word_or(r.decision, "—");
        let mc = match &r.mc {
            Some(m) if m.exact => format!("exact: all {} rearrangements ({})", m.resamples, esc(&m.scheme)),
            Some(m) => format!(
                "B = {}, 99% interval of p [{}, {}] ({})",
                m.resamples,
                num(Some(m.ci_low), 3),
                num(Some(m.ci_high), 3),
                esc(&m.scheme)
            ),
            None => String::new(),
        };
        writeln!(
            s,
            "<tr><td class=\"label\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td class=\"n\">{}</td><td>{decision}</td><td>{mc}</td></tr>",
            esc(&r.term),
            num(r.statistic, 4),
            df(r.df1),
            df(r.df2),
            p_value(r.p)
        )?;
    }
    writeln!(s, "</table></div>")?;
    let notes: Vec<String> =
        e.terms.iter().flat_map(|r| r.notes.iter().map(move |n| format!("{}: {}", esc(&r.term), esc(n)))).collect();
    if !notes.is_empty() {
        writeln!(s, "<ul class=\"notes\">")?;
        for n in notes {
            writeln!(s, "<li>{n}</li>")?;
        }
        writeln!(s, "</ul>")?;
    }
    Ok(())
}

/// A JSON value as short text for a table cell.
fn value_text(v: &serde_json::Value) -> String {
    match v {
        serde_json::Value::Null => "—".into(),
        serde_json::Value::String(s) => s.clone(),
        serde_json::Value::Number(n) => match n.as_f64() {
            Some(x) if n.is_f64() => num(Some(x), 4),
            _ => n.to_string(),
        },
        serde_json::Value::Bool(b) => b.to_string(),
        other => other.to_string(),
    }
}

/// A table of JSON objects: one column per key (in order of first appearance).
fn json_table(rows: &[serde_json::Value], class: &str, s: &mut String) -> W {
    let mut keys: Vec<String> = Vec::new();
    for r in rows {
        if let Some(o) = r.as_object() {
            for k in o.keys() {
                if !keys.contains(k) {
                    keys.push(k.clone());
                }
            }
        }
    }
    if keys.is_empty() {
        return Ok(());
    }
    write!(s, "<div class=\"scroll\"><table class=\"{}\">\n<tr>", esc(class))?;
    for k in &keys {
        write!(s, "<th>{}</th>", esc(&k.replace('_', " ")))?;
    }
    writeln!(s, "</tr>")?;
    for r in rows {
        write!(s, "<tr>")?;
        for k in &keys {
            let v = r.get(k).map(value_text).unwrap_or_default();
            write!(s, "<td class=\"label\">{}</td>", esc(&v))?;
        }
        writeln!(s, "</tr>")?;
    }
    writeln!(s, "</table></div>")
}

fn followups(a: &Analysis, s: &mut String) -> W {
    writeln!(s, "<section id=\"followup\">\n<h2>Follow-ups</h2>")?;
    if a.followup.is_empty() {
        writeln!(s, "<p>No follow-up tests in this run.</p>")?;
        return writeln!(s, "</section>");
    }
    let mut blocks = Vec::new();
    super::sections::followups(a, &mut blocks);
    super::doc::write_html(without_heading(&blocks), s);
    writeln!(s, "<h3>Every test</h3>")?;
    let every = super::capture(|out| super::followup_text::followups(&a.followup, out));
    writeln!(s, "<pre>{}</pre>", esc(&every))?;
    writeln!(s, "</section>")
}

/// Result sentences and the methods paragraph (the same text as the other reports).
fn paper(a: &Analysis, s: &mut String) -> W {
    writeln!(s, "<section id=\"paper\">\n<h2>For the paper</h2>")?;
    if a.concordance.is_empty() {
        writeln!(s, "<p>No tests were run (description only).</p>")?;
        return writeln!(s, "</section>");
    }
    writeln!(s, "<div class=\"write-up\">")?;
    let mut blocks = Vec::new();
    super::sections::for_the_paper(a, &mut blocks);
    super::doc::write_html(without_heading(&blocks), s);
    writeln!(s, "</div>\n</section>")
}

/// `blocks` without their leading section heading (the page writes its own `h2`).
fn without_heading(blocks: &[super::doc::Block]) -> &[super::doc::Block] {
    match blocks.first() {
        Some(super::doc::Block::Heading(_)) => &blocks[1..],
        _ => blocks,
    }
}

fn cautions(a: &Analysis, s: &mut String) -> W {
    writeln!(s, "<section id=\"cautions\">\n<h2>Cautions</h2>")?;
    let mut items: Vec<String> = Vec::new();
    for f in &a.diagnostics.flags {
        items.push(format!("{} <span class=\"flagcode\">[{}]</span>", esc(&f.message), esc(&f.code)));
    }
    for e in &a.engines {
        for r in &e.terms {
            if let Some(why) = &r.not_applicable {
                items.push(format!("<code>{}</code> could not test {}: {}", esc(&e.engine), esc(&r.term), esc(why)));
            }
            if r.decision == Some(Decision::Undetermined) {
                items.push(format!(
                    "<code>{}</code> on {}: the Monte Carlo interval of p contains α even after extension, so the decision is left open",
                    esc(&e.engine),
                    esc(&r.term)
                ));
            }
        }
        if let Some(Details::Art(d)) = &e.details {
            for f in &d.flags {
                items.push(format!(
                    "<code>art</code>: {} <span class=\"flagcode\">[{}]</span>",
                    esc(&f.message),
                    esc(&f.code)
                ));
            }
        }
    }
    for v in &a.sensitivity {
        if !v.rows_removed.is_empty() {
            items.push(
                "the sensitivity variant removes points chosen by looking at the data, so its p-values describe; they are not tests"
                    .into(),
            );
        }
    }
    for c in &a.concordance {
        if c.verdict == Verdict::MethodDependent {
            items.push(format!(
                "{}: the engines disagree; report the conclusion as depending on the method",
                esc(&c.term)
            ));
        }
    }
    if items.is_empty() {
        writeln!(s, "<p>Nothing to add: no flag fired, every engine ran on every term and decided.</p>")?;
    } else {
        writeln!(s, "<ul class=\"flags\">")?;
        for i in items {
            writeln!(s, "<li>{i}</li>")?;
        }
        writeln!(s, "</ul>")?;
    }
    writeln!(s, "</section>")
}

fn reproducibility(a: &Analysis, s: &mut String) -> W {
    let r = &a.reproducibility;
    writeln!(s, "<section id=\"reproducibility\">\n<h2>Reproducibility</h2>")?;
    writeln!(s, "<dl class=\"facts\">")?;
    writeln!(s, "<dt>Command</dt><dd><code>{}</code></dd>", esc(&r.command))?;
    writeln!(s, "<dt>quorum</dt><dd>{}</dd>", esc(&r.version))?;
    writeln!(s, "<dt>Seed</dt><dd>{} (every random stream derives from it)</dd>", r.seed)?;
    writeln!(s, "<dt>Threads</dt><dd>{} (the numbers do not depend on it)</dd>", r.threads)?;
    writeln!(s, "<dt>Data</dt><dd><code>{}</code>, {} rows used</dd>", esc(&a.input.path), a.input.rows_used)?;
    writeln!(s, "<dt>Results</dt><dd><code>results.json</code> ({}) beside this page</dd>", esc(a.schema))?;
    writeln!(s, "</dl>\n</section>")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn json_values_become_cell_text() {
        assert_eq!(value_text(&serde_json::json!(null)), "—");
        assert_eq!(value_text(&serde_json::json!(0.123456)), "0.1235");
        assert_eq!(value_text(&serde_json::json!(12)), "12");
        let mut s = String::new();
        json_table(&[serde_json::json!({"a<b": "<x>", "n": 1})], "t", &mut s).unwrap();
        assert!(s.contains("a&lt;b") && s.contains("&lt;x&gt;") && !s.contains("<x>"));
        assert_eq!(pct(0.95), "95");
        assert_eq!(pct(0.2), "20");
    }
}
