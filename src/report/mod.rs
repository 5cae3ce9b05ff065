//! Rendering the one [`Analysis`] value: one renderer per format, each writing to
//! `io::Write`, plus the report folder. Renderers format; they never compute statistics.
//! The text and Markdown reports share one document (`sections.rs` → `doc.rs`).

pub mod apa;
pub mod csv;
pub mod diagnostics_text;
pub mod doc;
pub mod escape;
pub mod folder;
pub mod followup_text;
pub mod html;
pub mod json;
pub mod markdown;
pub mod paper;
pub mod plots;
pub mod sections;
pub mod style;
pub mod table;
pub mod text;

use crate::config::Format;
use crate::results::Analysis;
use std::io::{self, Write};

/// A renderer of the whole analysis in one format.
pub trait Render {
    /// Writes `analysis` to `out`.
    ///
    /// # Errors
    /// Only I/O errors of `out`.
    fn render(&self, analysis: &Analysis, out: &mut dyn Write) -> io::Result<()>;
}

/// The renderer for a stdout format.
pub fn renderer(format: Format) -> Box<dyn Render> {
    match format {
        Format::Text => Box::new(text::Text),
        Format::Json => Box::new(json::Json),
        Format::Csv => Box::new(csv::Csv),
        Format::Markdown => Box::new(markdown::Markdown),
    }
}

/// How much of the report the text format shows.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Detail {
    /// The sections a reader needs, top to bottom (the terminal default).
    #[default]
    Summary,
    /// The sections plus every engine's details (report.txt, report.md, `--details`).
    Full,
}

/// Presentation options the binary passes to the renderer.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub struct RenderOptions {
    /// ANSI colour: only when standard output is a terminal and `NO_COLOR` is unset or
    /// empty (the binary decides; files and pipes never get colour).
    pub colour: bool,
    /// Detail of the text report.
    pub detail: Detail,
}

/// The renderer for a stdout format with presentation options (the text report gets
/// them; the other formats have none).
pub fn renderer_with(format: Format, options: RenderOptions) -> Box<dyn Render> {
    match format {
        Format::Text => Box::new(text::TextReport { colour: options.colour, detail: options.detail }),
        other => renderer(other),
    }
}

/// Runs a writer into a string (used to embed text sections in the document).
pub(crate) fn capture(f: impl FnOnce(&mut dyn Write) -> io::Result<()>) -> String {
    let mut buf = Vec::new();
    let _ = f(&mut buf);
    String::from_utf8_lossy(&buf).into_owned()
}

/// Renders into a string (tests, report files).
pub fn to_string(renderer: &dyn Render, analysis: &Analysis) -> String {
    let mut buf = Vec::new();
    // Writing into a Vec cannot fail.
    let _ = renderer.render(analysis, &mut buf);
    String::from_utf8_lossy(&buf).into_owned()
}
