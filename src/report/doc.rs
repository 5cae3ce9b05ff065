//! A small document model shared by the text and Markdown reports.
//!
//! The report's sections are built once as [`Block`]s from the [`Analysis`] value
//! (`sections.rs`), then written by one renderer per format: aligned plain text with
//! optional terminal colour ([`write_text`]) or Markdown ([`write_markdown`]). So the
//! two formats cannot drift apart, and escaping user-supplied strings (column names,
//! level labels, file names) happens in one place: every [`Span`] is text, never
//! markup, and the Markdown writer escapes it. Engine details that other parts of
//! the report render as aligned text travel as [`Block::Pre`] (a fenced block in
//! Markdown).
//!
//! [`Analysis`]: crate::results::Analysis

use super::table::Align;
use crate::results::Verdict;
use std::io::{self, Write};

/// How a span looks.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Style {
    /// Ordinary text.
    Plain,
    /// Bold (headings, the primary engine).
    Strong,
    /// Italic in Markdown (statistical symbols: *F*, *p*); plain on a terminal.
    Symbol,
    /// A warning (flags, direction conflicts, borderline).
    Warn,
    /// Secondary information.
    Muted,
    /// A verdict word, coloured by the verdict.
    Verdict(Verdict),
}

/// A run of text in one style. The text is never markup.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Span {
    /// Look.
    pub style: Style,
    /// Text.
    pub text: String,
}

/// A line of spans.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct Inline(pub Vec<Span>);

impl Inline {
    /// Empty.
    pub fn new() -> Inline {
        Inline(Vec::new())
    }

    /// One plain span.
    pub fn plain(text: impl Into<String>) -> Inline {
        Inline::new().add(Style::Plain, text)
    }

    /// Appends a span.
    pub fn add(mut self, style: Style, text: impl Into<String>) -> Inline {
        let text = text.into();
        if !text.is_empty() {
            self.0.push(Span { style, text });
        }
        self
    }

    /// Appends plain text.
    pub fn text(self, text: impl Into<String>) -> Inline {
        self.add(Style::Plain, text)
    }

    /// Appends another line's spans.
    pub fn extend(mut self, other: Inline) -> Inline {
        self.0.extend(other.0);
        self
    }

    /// The text without styles.
    pub fn plain_text(&self) -> String {
        self.0.iter().map(|s| s.text.as_str()).collect()
    }
}

impl From<&str> for Inline {
    fn from(s: &str) -> Inline {
        Inline::plain(s)
    }
}

impl From<String> for Inline {
    fn from(s: String) -> Inline {
        Inline::plain(s)
    }
}

/// A table: header, alignment and rows of styled cells.
#[derive(Debug, Clone, Default)]
pub struct DocTable {
    /// Column headers and alignments.
    pub columns: Vec<(String, Align)>,
    /// Rows (missing cells are blank).
    pub rows: Vec<Vec<Inline>>,
}

impl DocTable {
    /// A table with these columns.
    pub fn new(columns: &[(&str, Align)]) -> DocTable {
        DocTable { columns: columns.iter().map(|(h, a)| (h.to_string(), *a)).collect(), rows: Vec::new() }
    }

    /// Appends a row.
    pub fn row(&mut self, cells: Vec<Inline>) {
        self.rows.push(cells);
    }
}

/// One block of the report.
#[derive(Debug, Clone)]
pub enum Block {
    /// The report's title (first line).
    Title(Inline),
    /// A section heading.
    Heading(Inline),
    /// A sub-heading inside a section.
    Subheading(Inline),
    /// A paragraph, wrapped on the terminal.
    Para(Inline),
    /// Lines kept as they are (label/value lines).
    Lines(Vec<Inline>),
    /// A list.
    Bullets(Vec<Inline>),
    /// A table.
    Table(DocTable),
    /// Preformatted text from a text renderer (engine details); fenced in Markdown.
    Pre(String),
}

/// Options of the text writer.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct TextStyle {
    /// Emit ANSI colour and bold.
    pub colour: bool,
    /// Wrap paragraphs at this many columns.
    pub width: usize,
}

const INDENT: usize = 2;

/// Width of the labels of [`Block::Lines`] (`data     `), where wrapped values continue.
pub const LABEL_WIDTH: usize = 9;

fn ansi(style: Style) -> Option<&'static str> {
    match style {
        Style::Plain | Style::Symbol => None,
        Style::Strong => Some("\x1b[1m"),
        Style::Warn => Some("\x1b[33m"),
        Style::Muted => Some("\x1b[2m"),
        Style::Verdict(Verdict::Holds) => Some("\x1b[1;32m"),
        Style::Verdict(Verdict::NullHolds) => Some("\x1b[36m"),
        Style::Verdict(Verdict::MethodDependent) => Some("\x1b[1;33m"),
        Style::Verdict(Verdict::Undetermined) => Some("\x1b[35m"),
    }
}

fn paint(style: Style, text: &str, st: TextStyle) -> String {
    match (st.colour, ansi(style)) {
        (true, Some(code)) => format!("{code}{text}\x1b[0m"),
        _ => text.to_string(),
    }
}

fn styled(line: &Inline, st: TextStyle) -> String {
    line.0.iter().map(|s| paint(s.style, &s.text, st)).collect()
}

fn width(s: &str) -> usize {
    s.chars().count()
}

/// Wraps `line` at `limit` columns; continuation lines get `hang` spaces. Styles are
/// kept, and each line paints its runs of one style once.
fn wrap(line: &Inline, first: &str, hang: usize, limit: usize, st: TextStyle) -> Vec<String> {
    // Each output line as (prefix, runs of (style, text)).
    let mut lines: Vec<(String, Vec<(Style, String)>)> = vec![(first.to_string(), Vec::new())];
    let mut cur_w = width(first);
    let start_w = cur_w;
    let pad = " ".repeat(hang);
    for span in &line.0 {
        let pieces: Vec<&str> = span.text.split(' ').collect();
        let last = pieces.len() - 1;
        for (k, w) in pieces.into_iter().enumerate() {
            let ww = width(w);
            if cur_w + ww > limit && cur_w > start_w.max(hang) && !w.is_empty() {
                if let Some((_, runs)) = lines.last_mut() {
                    if let Some((_, t)) = runs.last_mut() {
                        let trimmed = t.trim_end().to_string();
                        *t = trimmed;
                    }
                }
                lines.push((pad.clone(), Vec::new()));
                cur_w = hang;
            }
            let text = if k < last { format!("{w} ") } else { w.to_string() };
            cur_w += width(&text);
            if let Some((_, runs)) = lines.last_mut() {
                match runs.last_mut() {
                    Some((style, t)) if *style == span.style => t.push_str(&text),
                    _ => runs.push((span.style, text)),
                }
            }
        }
    }
    let mut out: Vec<String> = lines
        .into_iter()
        .map(|(prefix, runs)| {
            let body: String = runs.iter().map(|(style, t)| paint(*style, t, st)).collect();
            format!("{prefix}{body}").trim_end().to_string()
        })
        .filter(|l| !l.trim().is_empty())
        .collect();
    if out.is_empty() {
        out.push(String::new());
    }
    out
}

fn text_table(t: &DocTable, st: TextStyle) -> Vec<String> {
    let ncol = t.columns.len();
    let mut widths: Vec<usize> = t.columns.iter().map(|(h, _)| width(h)).collect();
    for r in &t.rows {
        for (i, c) in r.iter().enumerate().take(ncol) {
            widths[i] = widths[i].max(width(&c.plain_text()));
        }
    }
    let pad = " ".repeat(INDENT);
    let line = |cells: Vec<(String, String)>| {
        // (plain, styled)
        let parts: Vec<String> = (0..ncol)
            .map(|i| {
                let (plain, styled) = cells.get(i).cloned().unwrap_or_default();
                let fill = " ".repeat(widths[i] - width(&plain));
                match t.columns[i].1 {
                    Align::Left => format!("{styled}{fill}"),
                    Align::Right => format!("{fill}{styled}"),
                }
            })
            .collect();
        format!("{pad}{}", parts.join("  ")).trim_end().to_string()
    };
    let header: Vec<(String, String)> =
        t.columns.iter().map(|(h, _)| (h.clone(), paint(Style::Muted, h, st))).collect();
    let mut out = vec![line(header)];
    for r in &t.rows {
        out.push(line(r.iter().map(|c| (c.plain_text(), styled(c, st))).collect()));
    }
    out
}

/// Writes `blocks` as aligned text.
///
/// # Errors
/// Only I/O errors of `out`.
pub fn write_text(blocks: &[Block], st: TextStyle, out: &mut dyn Write) -> io::Result<()> {
    let mut previous: Option<&Block> = None;
    for b in blocks {
        // A blank line before headings and paragraphs, except right under a heading.
        let after_heading = matches!(previous, Some(Block::Title(_) | Block::Heading(_) | Block::Subheading(_)));
        let spaced = match b {
            Block::Heading(_) => previous.is_some(),
            Block::Subheading(_) => previous.is_some() && !matches!(previous, Some(Block::Heading(_))),
            Block::Para(_) => !after_heading,
            _ => false,
        };
        if spaced {
            writeln!(out)?;
        }
        match b {
            Block::Title(t) => writeln!(out, "{}", paint(Style::Strong, &t.plain_text(), st))?,
            Block::Heading(t) => writeln!(out, "{}", paint(Style::Strong, &t.plain_text().to_uppercase(), st))?,
            Block::Subheading(t) => {
                let bold = Inline::new().add(Style::Strong, t.plain_text());
                for l in wrap(&bold, &" ".repeat(INDENT), INDENT, st.width, st) {
                    writeln!(out, "{l}")?;
                }
            }
            Block::Para(t) => {
                let pad = " ".repeat(INDENT);
                for l in wrap(t, &pad, INDENT, st.width, st) {
                    writeln!(out, "{l}")?;
                }
            }
            Block::Lines(lines) => {
                // Label/value lines wrap under the value (labels are LABEL_WIDTH wide).
                let pad = " ".repeat(INDENT);
                for l in lines {
                    for w in wrap(l, &pad, INDENT + LABEL_WIDTH, st.width, st) {
                        writeln!(out, "{w}")?;
                    }
                }
            }
            Block::Bullets(items) => {
                for item in items {
                    for l in wrap(item, "  - ", INDENT + 2, st.width, st) {
                        writeln!(out, "{l}")?;
                    }
                }
            }
            Block::Table(t) => {
                for l in text_table(t, st) {
                    writeln!(out, "{l}")?;
                }
            }
            Block::Pre(s) => {
                write!(out, "{s}")?;
                if !s.ends_with('\n') {
                    writeln!(out)?;
                }
            }
        }
        previous = Some(b);
    }
    Ok(())
}

/// Escaping that keeps ordinary prose readable in the Markdown source: the characters
/// that can open or close inline markup anywhere (`\`, `` ` ``, `*`, `_`, `[`, `]`,
/// `<`, `>`, `|`, `~`, `&`) always get a backslash; at the start of a line also a
/// leading `#`, `-`, `+`, `=` (headings, lists, setext underlines) and the `.` or `)`
/// after leading digits (ordered lists). CommonMark lets a backslash escape any ASCII
/// punctuation and nothing else, so digits themselves are never escaped.
fn md_inline(line: &Inline, at_line_start: bool) -> String {
    let mut out = String::new();
    for (i, s) in line.0.iter().enumerate() {
        let text = super::escape::markdown(&s.text, at_line_start && i == 0);
        // Emphasis markers must hug non-space text: move surrounding spaces outside.
        let trimmed = text.trim();
        let (lead, trail) = if trimmed.is_empty() {
            (text.as_str(), "")
        } else {
            let l = &text[..text.len() - text.trim_start().len()];
            let r = &text[text.trim_end().len()..];
            (l, r)
        };
        match s.style {
            Style::Strong | Style::Verdict(Verdict::MethodDependent) if !trimmed.is_empty() => {
                out.push_str(&format!("{lead}**{trimmed}**{trail}"))
            }
            Style::Symbol if !trimmed.is_empty() => out.push_str(&format!("{lead}*{trimmed}*{trail}")),
            _ => out.push_str(&text),
        }
    }
    out
}

/// Writes `blocks` as Markdown (CommonMark with pipe tables).
///
/// # Errors
/// Only I/O errors of `out`.
pub fn write_markdown(blocks: &[Block], out: &mut dyn Write) -> io::Result<()> {
    for b in blocks {
        match b {
            Block::Title(t) => writeln!(out, "# {}\n", md_inline(t, false))?,
            Block::Heading(t) => writeln!(out, "## {}\n", md_inline(t, false))?,
            Block::Subheading(t) => writeln!(out, "### {}\n", md_inline(t, false))?,
            Block::Para(t) => writeln!(out, "{}\n", md_inline(t, true))?,
            Block::Lines(lines) => {
                // Hard line breaks (two trailing spaces) keep label/value lines apart.
                let body: Vec<String> = lines.iter().map(|l| md_inline(l, true)).collect();
                writeln!(out, "{}\n", body.join("  \n"))?;
            }
            Block::Bullets(items) => {
                for i in items {
                    writeln!(out, "- {}", md_inline(i, true))?;
                }
                writeln!(out)?;
            }
            Block::Table(t) => {
                let head: Vec<String> = t.columns.iter().map(|(h, _)| super::escape::markdown(h, false)).collect();
                writeln!(out, "| {} |", head.join(" | "))?;
                let rule: Vec<&str> = t
                    .columns
                    .iter()
                    .map(|(_, a)| match a {
                        Align::Left => ":---",
                        Align::Right => "---:",
                    })
                    .collect();
                writeln!(out, "| {} |", rule.join(" | "))?;
                for r in &t.rows {
                    let cells: Vec<String> = (0..t.columns.len())
                        .map(|i| r.get(i).map(|c| md_inline(c, false)).unwrap_or_default())
                        .map(|c| if c.is_empty() { " ".into() } else { c })
                        .collect();
                    writeln!(out, "| {} |", cells.join(" | "))?;
                }
                writeln!(out)?;
            }
            Block::Pre(s) => {
                let longest = s.split(|c| c != '`').map(str::len).max().unwrap_or(0);
                let fence = "`".repeat(longest.max(2) + 1);
                writeln!(out, "{fence}text\n{}{}{fence}\n", s, if s.ends_with('\n') { "" } else { "\n" })?;
            }
        }
    }
    Ok(())
}

/// One span as HTML: its text escaped ([`super::escape::html`]), its style as an element
/// or a class of the page's CSS.
fn html_span(sp: &Span) -> String {
    let t = super::escape::html(&sp.text);
    match sp.style {
        Style::Plain => t,
        Style::Strong => format!("<strong>{t}</strong>"),
        Style::Symbol => format!("<em>{t}</em>"),
        Style::Warn => format!("<span class=\"warn\">{t}</span>"),
        Style::Muted => format!("<span class=\"muted\">{t}</span>"),
        Style::Verdict(v) => format!("<span class=\"v-word {}\">{t}</span>", verdict_class(v)),
    }
}

/// CSS class of a verdict (the page's badge colours).
pub fn verdict_class(v: Verdict) -> &'static str {
    match v {
        Verdict::Holds => "v-holds",
        Verdict::NullHolds => "v-null-holds",
        Verdict::MethodDependent => "v-method-dependent",
        Verdict::Undetermined => "v-undetermined",
    }
}

fn html_inline(l: &Inline) -> String {
    l.0.iter().map(html_span).collect()
}

/// Writes `blocks` as HTML fragments for the HTML report: the title is left out (the
/// page has its own), headings become `h3`/`h4` (the page's sections own `h2`), tables
/// scroll sideways inside their box, preformatted text stays preformatted. Every text
/// is escaped, so user strings cannot become markup.
pub fn write_html(blocks: &[Block], s: &mut String) {
    use std::fmt::Write as _;
    for b in blocks {
        // Writing into a String cannot fail.
        let _ = match b {
            Block::Title(_) => Ok(()),
            Block::Heading(t) => writeln!(s, "<h3>{}</h3>", html_inline(t)),
            Block::Subheading(t) => writeln!(s, "<h4>{}</h4>", html_inline(t)),
            Block::Para(t) => writeln!(s, "<p>{}</p>", html_inline(t)),
            Block::Lines(lines) => {
                let body: Vec<String> = lines.iter().map(html_inline).collect();
                writeln!(s, "<p class=\"lines\">{}</p>", body.join("<br/>"))
            }
            Block::Bullets(items) => {
                let body: String = items.iter().map(|i| format!("<li>{}</li>", html_inline(i))).collect();
                writeln!(s, "<ul>{body}</ul>")
            }
            Block::Table(t) => {
                let class = |a: &Align| match a {
                    Align::Left => "",
                    Align::Right => " class=\"n\"",
                };
                let head: String =
                    t.columns.iter().map(|(h, a)| format!("<th{}>{}</th>", class(a), super::escape::html(h))).collect();
                let mut rows = String::new();
                for r in &t.rows {
                    rows.push_str("<tr>");
                    for (i, (_, a)) in t.columns.iter().enumerate() {
                        let cell = r.get(i).map(html_inline).unwrap_or_default();
                        rows.push_str(&format!("<td{}>{cell}</td>", class(a)));
                    }
                    rows.push_str("</tr>\n");
                }
                writeln!(s, "<div class=\"scroll\"><table class=\"doc\">\n<tr>{head}</tr>\n{rows}</table></div>")
            }
            Block::Pre(text) => writeln!(s, "<pre>{}</pre>", super::escape::html(text)),
        };
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn text(blocks: &[Block], colour: bool) -> String {
        let mut v = Vec::new();
        write_text(blocks, TextStyle { colour, width: 40 }, &mut v).unwrap();
        String::from_utf8(v).unwrap()
    }

    fn md(blocks: &[Block]) -> String {
        let mut v = Vec::new();
        write_markdown(blocks, &mut v).unwrap();
        String::from_utf8(v).unwrap()
    }

    #[test]
    fn paragraphs_wrap_and_colour_only_when_asked() {
        let p = Block::Para(Inline::plain("one two three four five six seven eight nine ten eleven twelve"));
        let t = text(std::slice::from_ref(&p), false);
        assert!(t.lines().all(|l| l.chars().count() <= 40), "{t}");
        assert_eq!(t.split_whitespace().count(), 12);
        assert!(!t.contains('\x1b'));
        let h = Block::Heading(Inline::plain("concordance"));
        assert!(text(std::slice::from_ref(&h), true).contains("\x1b[1mCONCORDANCE\x1b[0m"));
        let two =
            [Block::Heading("a".into()), Block::Para("x".into()), Block::Para("y".into()), Block::Heading("b".into())];
        assert_eq!(text(&two, false), "A\n  x\n\n  y\n\nB\n");
        assert_eq!(text(&[h], false), "CONCORDANCE\n");
    }

    #[test]
    fn styled_tables_align_on_visible_width() {
        let mut t = DocTable::new(&[("term", Align::Left), ("verdict", Align::Left), ("p", Align::Right)]);
        t.row(vec!["A".into(), Inline::new().add(Style::Verdict(Verdict::Holds), "holds"), ".015".into()]);
        t.row(vec![
            "A:B".into(),
            Inline::new().add(Style::Verdict(Verdict::MethodDependent), "method-dependent"),
            ".2".into(),
        ]);
        let plain = text(&[Block::Table(t.clone())], false);
        assert_eq!(
            plain,
            "  term  verdict              p\n  A     holds             .015\n  A:B   method-dependent    .2\n"
        );
        let coloured = text(&[Block::Table(t)], true);
        let stripped: String = {
            let mut s = String::new();
            let mut esc = false;
            for ch in coloured.chars() {
                if ch == '\x1b' {
                    esc = true;
                } else if esc && ch == 'm' {
                    esc = false;
                } else if !esc {
                    s.push(ch);
                }
            }
            s
        };
        assert_eq!(stripped, plain);
    }

    #[test]
    fn markdown_escapes_user_strings() {
        let evil = "a|b *x* _y_ [link](http://e) <script> `c` \\ ~z~ & #h";
        let mut t = DocTable::new(&[("level", Align::Left)]);
        t.row(vec![Inline::plain(evil)]);
        let out = md(&[
            Block::Table(t),
            Block::Para(Inline::plain("# not a heading")),
            Block::Lines(vec!["- not a list".into(), "12. not a list".into()]),
            Block::Bullets(vec!["1) nor this".into()]),
        ]);
        assert!(out.contains(r"a\|b \*x\* \_y\_ \[link\](http://e) \<script\> \`c\` \\ \~z\~ \& #h"), "{out}");
        assert!(out.contains("\\# not a heading"));
        assert!(out.contains("\\- not a list"));
        assert!(out.contains("12\\. not a list") && out.contains("- 1\\) nor this"), "{out}");
        // A preformatted block with backticks gets a longer fence.
        let out = md(&[Block::Pre("x ``` y\n".into())]);
        assert!(out.starts_with("````text\n"), "{out}");
    }

    #[test]
    fn markdown_emphasis_hugs_text() {
        let l = Inline::new()
            .text("value ")
            .add(Style::Symbol, "F")
            .text("(2, 51) = 4.54, ")
            .add(Style::Symbol, "p")
            .text(" = .015");
        assert_eq!(md(&[Block::Para(l)]), "value *F*(2, 51) = 4.54, *p* = .015\n\n");
        let l = Inline::new().add(Style::Strong, " primary ");
        assert_eq!(md(&[Block::Para(l)]), "**primary** \n\n");
        // Table cells are not line starts: numbers stay as they are.
        let mut t = DocTable::new(&[("x", Align::Right)]);
        t.row(vec!["-0.77".into()]);
        t.row(vec![".015".into()]);
        assert_eq!(md(&[Block::Table(t)]), "| x |\n| ---: |\n| -0.77 |\n| .015 |\n\n");
    }
}
