//! Getting the bytes of an input file into checked UTF-8 text and finding its delimiter.
//!
//! Research data arrive from spreadsheets, survey exports and instruments: byte-order
//! marks, CRLF line ends, Latin-1 or UTF-16 text, stray NUL bytes. This file turns the
//! raw bytes into text the CSV reader can trust, or into an error naming the line.

use crate::config::{Delimiter, Source};
use crate::error::{Error, Location, Result};
use std::io::Read;

/// Reads the whole input (file, standard input or embedded text) into memory.
///
/// # Errors
/// An I/O error naming the path.
pub fn load(source: &Source) -> Result<Vec<u8>> {
    match source {
        Source::File(path) => std::fs::read(path).map_err(|e| Error::Io {
            path: path.display().to_string(),
            action: "reading",
            source: e,
        }),
        Source::Stdin => {
            let mut buf = Vec::new();
            std::io::stdin().lock().read_to_end(&mut buf).map_err(|e| Error::Io {
                path: "<stdin>".into(),
                action: "reading",
                source: e,
            })?;
            Ok(buf)
        }
        Source::Embedded { text, .. } => Ok(text.as_bytes().to_vec()),
    }
}

/// 1-based line number of byte offset `pos`.
pub fn line_of(bytes: &[u8], pos: usize) -> u64 {
    1 + bytes[..pos.min(bytes.len())].iter().filter(|&&b| b == b'\n').count() as u64
}

/// Line numbers of record starts, counted incrementally from byte offsets.
///
/// The CSV reader's own line counter lags by one after a CRLF line end, so quorum
/// counts newlines itself: a record starting at byte `b` is on the line of its first
/// character after any line-end bytes.
pub struct LineCounter<'a> {
    text: &'a [u8],
    pos: usize,
    line: u64,
}

impl<'a> LineCounter<'a> {
    /// A counter over `text`, whose first byte is on line `first_line`.
    pub fn new(text: &'a [u8], first_line: u64) -> Self {
        LineCounter { text, pos: 0, line: first_line }
    }

    /// The line of the record that starts at byte `byte` (non-decreasing calls).
    pub fn line_at(&mut self, byte: u64) -> u64 {
        let mut target = (byte as usize).min(self.text.len());
        while target < self.text.len() && matches!(self.text[target], b'\r' | b'\n') {
            target += 1;
        }
        if target > self.pos {
            self.line += count_line_feeds(&self.text[self.pos..target]);
            self.pos = target;
        }
        self.line
    }
}

/// The line feeds in `bytes`, eight bytes at a time: a byte of `w ^ 0x0a0a…` is zero
/// exactly where `w` has a line feed, and the mask below sets the top bit of exactly
/// the zero bytes (no borrow between bytes, unlike the shorter `(x − 0x01…) & !x`).
fn count_line_feeds(bytes: &[u8]) -> u64 {
    const LOW7: u64 = 0x7f7f_7f7f_7f7f_7f7f;
    let mut chunks = bytes.chunks_exact(8);
    let mut count = 0u64;
    for chunk in &mut chunks {
        let mut word = [0u8; 8];
        word.copy_from_slice(chunk);
        let x = u64::from_le_bytes(word) ^ 0x0a0a_0a0a_0a0a_0a0a;
        let zero_tops = !(((x & LOW7) + LOW7) | x | LOW7);
        count += u64::from(zero_tops.count_ones());
    }
    count + chunks.remainder().iter().filter(|&&b| b == b'\n').count() as u64
}

/// Checks the encoding and strips a UTF-8 byte-order mark. Returns the offset where the
/// text starts.
///
/// # Errors
/// Empty input, UTF-16/32 text, NUL bytes, or invalid UTF-8, each with the line.
pub fn check_text(bytes: &[u8], loc: &Location) -> Result<usize> {
    if bytes.iter().all(|b| b.is_ascii_whitespace()) {
        return Err(Error::input_hint(
            loc.clone(),
            "the file is empty",
            "give a file with a header line and data rows",
        ));
    }
    if bytes.starts_with(&[0xFF, 0xFE]) || bytes.starts_with(&[0xFE, 0xFF]) {
        return Err(Error::input_hint(
            loc.clone(),
            "the file is UTF-16 text",
            "save it as UTF-8 (in a spreadsheet: \"CSV UTF-8\")",
        ));
    }
    let start = if bytes.starts_with(&[0xEF, 0xBB, 0xBF]) { 3 } else { 0 };
    // `contains` on bytes is a fast memchr; the position is needed only on failure.
    if let Some(pos) = bytes.contains(&0).then(|| bytes.iter().position(|&b| b == 0)).flatten() {
        return Err(Error::input_hint(
            loc.at_line(line_of(bytes, pos)),
            "the file contains a NUL byte, so it looks binary rather than text",
            "export the data as CSV or TSV text",
        ));
    }
    if let Err(e) = std::str::from_utf8(&bytes[start..]) {
        let pos = start + e.valid_up_to();
        return Err(Error::input_hint(
            loc.at_line(line_of(bytes, pos)),
            "the file is not valid UTF-8 text (perhaps Latin-1 or Windows-1252)",
            "re-save the file as UTF-8",
        ));
    }
    Ok(start)
}

/// Checks that every quoted field is closed. As in the CSV reader, a quote opens a
/// quoted field only at the start of a field; inside it `""` is an escaped quote and a
/// lone `"` closes it; elsewhere quotes are literal (`12"`). A quoted field still open at
/// the end of the file would swallow the rest of the data silently.
///
/// # Errors
/// The line where the unclosed quoted field starts.
pub fn check_quotes(text: &[u8], delimiter: u8, loc: &Location) -> Result<()> {
    let mut at_field_start = true;
    let mut open_at: Option<usize> = None;
    let mut i = 0;
    while i < text.len() {
        let b = text[i];
        match open_at {
            Some(_) => {
                if b == b'"' {
                    if text.get(i + 1) == Some(&b'"') {
                        i += 1;
                    } else {
                        open_at = None;
                        at_field_start = false;
                    }
                }
            }
            None => {
                if b == b'"' && at_field_start {
                    open_at = Some(i);
                }
                at_field_start = b == delimiter || b == b'\n' || b == b'\r';
            }
        }
        i += 1;
    }
    match open_at {
        None => Ok(()),
        Some(pos) => Err(Error::input_hint(
            loc.at_line(line_of(text, pos)),
            "a quoted field that starts on this line is never closed, so it would swallow the rest of the file",
            "close the quote, or remove it",
        )),
    }
}

/// Field counts of the first records when split by `delim` (quotes respected).
fn field_counts(text: &[u8], delim: u8, max_records: usize) -> Vec<usize> {
    let mut reader = csv::ReaderBuilder::new().has_headers(false).flexible(true).delimiter(delim).from_reader(text);
    let mut counts = Vec::new();
    let mut rec = csv::ByteRecord::new();
    while counts.len() < max_records {
        match reader.read_byte_record(&mut rec) {
            Ok(true) => {
                if !(rec.len() == 1 && rec[0].iter().all(|b| b.is_ascii_whitespace())) {
                    counts.push(rec.len());
                }
            }
            _ => break,
        }
    }
    counts
}

/// Picks the delimiter: the user's, or among comma, tab and semicolon the one that
/// splits the header into the most fields and splits the first 50 records consistently.
///
/// # Errors
/// When no candidate gives at least two columns.
pub fn detect_delimiter(text: &[u8], requested: Delimiter, decimal_comma: bool, loc: &Location) -> Result<u8> {
    if let Delimiter::Byte(b) = requested {
        if decimal_comma && b == b',' {
            return Err(Error::usage(
                "--decimal-comma cannot be combined with a comma delimiter",
                "files with decimal commas usually separate fields with semicolons or tabs",
            ));
        }
        return Ok(b);
    }
    let candidates: &[u8] = if decimal_comma { b"\t;" } else { b",\t;" };
    let mut best: Option<(bool, usize, u8)> = None;
    for &d in candidates {
        let counts = field_counts(text, d, 50);
        let Some(&header) = counts.first() else {
            continue;
        };
        let consistent = counts.iter().all(|&c| c == header);
        let key = (consistent && header >= 2, header, d);
        if header >= 2 && best.is_none_or(|b| (key.0, key.1) > (b.0, b.1)) {
            best = Some(key);
        }
    }
    match best {
        Some((_, _, d)) => Ok(d),
        None => Err(Error::input_hint(
            loc.at_line(1),
            "the header has only one column when split by comma, tab or semicolon",
            "the file needs an outcome column and factor columns; name the delimiter with --delimiter",
        )),
    }
}

/// A printable name for a delimiter byte.
pub fn delimiter_name(d: u8) -> String {
    match d {
        b',' => "comma".into(),
        b'\t' => "tab".into(),
        b';' => "semicolon".into(),
        b'|' => "vertical bar".into(),
        other => format!("`{}`", other as char),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn line_feeds_are_counted_exactly_in_any_bytes() {
        // Every byte value next to line feeds, at every offset and length.
        let mut bytes: Vec<u8> = (0..=255u8).flat_map(|b| [b, b'\n', b, b.wrapping_add(1)]).collect();
        bytes.extend_from_slice(b"\n\n\x0b\x09\n\x8a\x0a\x01\x0a");
        for start in 0..16 {
            for end in (start..bytes.len()).step_by(7).chain([bytes.len()]) {
                let slice = &bytes[start..end];
                let want = slice.iter().filter(|&&b| b == b'\n').count() as u64;
                assert_eq!(count_line_feeds(slice), want, "{start}..{end}");
            }
        }
    }

    fn loc() -> Location {
        Location::file("t.csv")
    }

    #[test]
    fn detects_common_delimiters() {
        assert_eq!(detect_delimiter(b"y,a,b\n1,x,y\n", Delimiter::Auto, false, &loc()).unwrap(), b',');
        assert_eq!(detect_delimiter(b"y\ta\n1\tx\n", Delimiter::Auto, false, &loc()).unwrap(), b'\t');
        assert_eq!(detect_delimiter(b"y;a\n7,5;x\n", Delimiter::Auto, true, &loc()).unwrap(), b';');
        // Quoted commas do not count.
        assert_eq!(detect_delimiter(b"y;a\n1;\"x,y\"\n", Delimiter::Auto, false, &loc()).unwrap(), b';');
    }

    #[test]
    fn unclosed_quotes_are_found_and_literal_quotes_pass() {
        assert!(check_quotes(b"y,g\n1,\"a\"\"b\"\n", b',', &loc()).is_ok());
        assert!(check_quotes(b"y,g\n1,12\"\n2,a\n", b',', &loc()).is_ok());
        assert!(check_quotes(b"y,g\n1,\"a\nb\"\n", b',', &loc()).is_ok());
        let e = check_quotes(b"y,g\n1,a\n2,\"b\n3,a\n", b',', &loc()).unwrap_err();
        assert!(e.to_string().contains("line 3"), "{e}");
    }

    #[test]
    fn one_column_is_an_error() {
        assert!(detect_delimiter(b"y\n1\n", Delimiter::Auto, false, &loc()).is_err());
    }

    #[test]
    fn encoding_problems_name_the_line() {
        assert!(check_text(b"", &loc()).is_err());
        assert_eq!(check_text(b"\xEF\xBB\xBFy,a\n", &loc()).unwrap(), 3);
        let e = check_text(b"y,a\n1,caf\xE9\n", &loc()).unwrap_err();
        assert!(e.to_string().contains("line 2"), "{e}");
        let e = check_text(b"y,a\n1,x\n2,\0\n", &loc()).unwrap_err();
        assert!(e.to_string().contains("line 3"), "{e}");
        assert!(check_text(b"\xFF\xFEy\0", &loc()).is_err());
    }
}
