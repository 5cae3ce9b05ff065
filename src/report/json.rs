//! The `quorum.results/1` JSON object (DESIGN.md "results.json (the contract)").

use super::Render;
use crate::results::Analysis;
use std::io::{self, Write};

/// Pretty-printed JSON, one object, trailing newline.
pub struct Json;

impl Render for Json {
    fn render(&self, analysis: &Analysis, out: &mut dyn Write) -> io::Result<()> {
        serde_json::to_writer_pretty(&mut *out, analysis).map_err(io::Error::other)?;
        writeln!(out)
    }
}
