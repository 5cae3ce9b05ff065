//! The report as Markdown (`--format markdown`, `report.md`): the same document as the
//! text report ([`super::sections`]), with every engine's details, written by
//! [`super::doc::write_markdown`], which escapes every user-supplied string.

use super::{Detail, Render};
use crate::results::Analysis;
use std::io::{self, Write};

/// The Markdown renderer (always the full report).
pub struct Markdown;

impl Render for Markdown {
    fn render(&self, analysis: &Analysis, out: &mut dyn Write) -> io::Result<()> {
        super::doc::write_markdown(&super::sections::build(analysis, Detail::Full), out)
    }
}
