//! Rendering the one [`Analysis`] value: one renderer per format, each writing to
//! `io::Write`, plus the report folder. Renderers format; they never compute statistics.

pub mod csv;
pub mod diagnostics_text;
pub mod escape;
pub mod folder;
pub mod html;
pub mod json;
pub mod plots;
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
    }
}

/// Renders into a string (tests, report files).
pub fn to_string(renderer: &dyn Render, analysis: &Analysis) -> String {
    let mut buf = Vec::new();
    // Writing into a Vec cannot fail.
    let _ = renderer.render(analysis, &mut buf);
    String::from_utf8_lossy(&buf).into_owned()
}
