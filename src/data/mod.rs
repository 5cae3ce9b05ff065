//! Reading long-format data: one row per participant, an outcome column and factor columns.
//!
//! The data layer knows nothing about statistics. It turns a delimited text file into
//! an [`Observations`] value: the outcome as exactly centred doubles, each factor as
//! integer codes into its distinct labels, and the 1-based input line of every row so
//! that every later message and outlier can point back into the user's file. Rows with
//! a missing value are dropped and listed; anything unusable is an input error that
//! names the file, line and column and says what to do (DESIGN.md).

pub mod number;
mod parallel;
pub mod rows;
pub mod sheet;
pub mod text;

use crate::config::DataSpec;
use crate::error::{Error, Location, Result};
use rows::{Field, Role, RowSink};
use serde::Serialize;

/// The most factors a design may have.
pub const MAX_FACTORS: usize = 6;

/// A row left out of the analysis, with its input line.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct Dropped {
    /// 1-based input line.
    pub line: u64,
    /// Why, e.g. "missing outcome `score`".
    pub reason: String,
}

/// One factor column as read: distinct labels in first-appearance order and a code per row.
#[derive(Debug, Clone)]
pub struct FactorColumn {
    /// Column name.
    pub name: String,
    /// Distinct labels exactly as written (no trimming), in first-appearance order.
    pub labels: Vec<String>,
    /// Line where each label first appears (parallel to `labels`).
    pub first_line: Vec<u64>,
    /// Per used row, the index into `labels`.
    pub codes: Vec<u32>,
}

/// The rows used for analysis, in input order.
#[derive(Debug, Clone)]
pub struct Observations {
    /// The input as named by the user (`<stdin>` for standard input).
    pub source: String,
    /// Outcome column name.
    pub outcome: String,
    /// Outcome values minus `location`, computed exactly from the decimal text.
    pub y: Vec<f64>,
    /// Value added back for location statistics (means, medians, extremes).
    pub location: f64,
    /// Factor columns, in the order given to `--factors`.
    pub factors: Vec<FactorColumn>,
    /// Input line of each used row.
    pub lines: Vec<u64>,
    /// Data rows in the file (excluding the header and blank lines).
    pub rows_read: usize,
    /// Rows dropped because of a missing value.
    pub dropped: Vec<Dropped>,
    /// The delimiter used.
    pub delimiter: u8,
}

/// Reads and checks the data described by `spec`.
///
/// # Errors
/// Exit-2 input errors: unreadable or non-UTF-8 file, no header, unknown or duplicate
/// columns, ragged rows, a non-numeric or non-finite outcome, a repeated participant id,
/// too many factors, or no complete rows.
pub fn read(spec: &DataSpec) -> Result<Observations> {
    let source = spec.source.display_name();
    let loc = Location::file(source.clone());
    let bytes = text::load(&spec.source)?;
    if sheet::looks_like_spreadsheet(&bytes) {
        check_spec(spec)?;
        return sheet::parse(&bytes, spec, &source, &loc);
    }
    if spec.sheet.is_some() {
        return Err(Error::usage(
            "--sheet was given but the input is not a spreadsheet",
            "drop --sheet for CSV or TSV files",
        ));
    }
    parse(&bytes, spec, &source, &loc)
}

/// Parses already loaded bytes (see [`read`]).
///
/// Files of at least 1 MiB (`parallel::MIN_BYTES`) without any quote character are
/// parsed in ranges on the rayon pool (see `data/parallel.rs`); the result, and the first
/// error in file order, are the same as from one sequential pass.
///
/// # Errors
/// As [`read`].
pub fn parse(bytes: &[u8], spec: &DataSpec, source: &str, loc: &Location) -> Result<Observations> {
    parse_split(bytes, spec, source, loc, parallel::Split::for_pool())
}

/// [`parse`] with an explicit choice of when and how to split the body into ranges (the
/// tests force the parallel path on small inputs with it).
pub(crate) fn parse_split(
    bytes: &[u8],
    spec: &DataSpec,
    source: &str,
    loc: &Location,
    split: parallel::Split,
) -> Result<Observations> {
    check_spec(spec)?;
    let start = text::check_text(bytes, loc)?;
    let body = &bytes[start..];
    let delimiter = text::detect_delimiter(body, spec.delimiter, spec.decimal_comma, loc)?;
    let has_quotes = body.contains(&b'"');
    if has_quotes {
        text::check_quotes(body, delimiter, loc)?;
    }
    let mut reader = reader_over(body, delimiter);
    let mut record = csv::ByteRecord::new();
    let mut lines = text::LineCounter::new(body, 1);
    let ctx = Ranges { bytes, start, loc, spec, delimiter, header_len: 0 };
    let header = ctx.read_header(&mut reader, &mut record)?;
    let header_line = lines.line_at(record_byte(&record));
    let columns = Columns::locate(&header, spec, &loc.at_line(header_line), delimiter)?;
    let ctx = Ranges { header_len: header.len(), ..ctx };

    let header_end = reader.position().byte() as usize;
    if let Some(bounds) = split.bounds(body, header_end, has_quotes) {
        return parallel::parse_ranges(&ctx, &columns, body, &bounds, source);
    }
    let mut sink = RowSink::new(spec);
    sink.reserve(body[header_end.min(body.len())..].iter().filter(|&&b| b == b'\n').count() + 1);
    ctx.read_rows(&mut reader, &mut record, &mut lines, 0, &columns, &mut sink)?;
    sink.finish(source, loc, delimiter)
}

fn reader_over(text: &[u8], delimiter: u8) -> csv::Reader<&[u8]> {
    csv::ReaderBuilder::new().has_headers(false).flexible(true).delimiter(delimiter).from_reader(text)
}

fn record_byte(record: &csv::ByteRecord) -> u64 {
    record.position().map(|p| p.byte()).unwrap_or(0)
}

/// What reading any range of the body needs: the input, its options and the header width.
struct Ranges<'a> {
    bytes: &'a [u8],
    start: usize,
    loc: &'a Location,
    spec: &'a DataSpec,
    delimiter: u8,
    header_len: usize,
}

impl Ranges<'_> {
    /// The next record; `lines_before` is the number of line ends before the reader's
    /// text in the body (for the line of a CSV error).
    fn next(&self, reader: &mut csv::Reader<&[u8]>, record: &mut csv::ByteRecord, lines_before: u64) -> Result<bool> {
        reader.read_byte_record(record).map_err(|e| csv_error(e, self.bytes, self.start, lines_before, self.loc))
    }

    /// Skips blank lines and reads the header record into `record`.
    fn read_header(&self, reader: &mut csv::Reader<&[u8]>, record: &mut csv::ByteRecord) -> Result<Vec<String>> {
        loop {
            if !self.next(reader, record, 0)? {
                return Err(Error::input_hint(
                    self.loc.clone(),
                    "the file has no header line",
                    "the first line must name the columns",
                ));
            }
            if !is_blank(record) {
                return Ok(header_names(record));
            }
        }
    }

    /// Reads data records to the end of the reader's text into `sink`.
    fn read_rows(
        &self,
        reader: &mut csv::Reader<&[u8]>,
        record: &mut csv::ByteRecord,
        lines: &mut text::LineCounter<'_>,
        lines_before: u64,
        columns: &Columns,
        sink: &mut RowSink<'_>,
    ) -> Result<()> {
        while self.next(reader, record, lines_before)? {
            if is_blank(record) {
                continue;
            }
            let line = lines.line_at(record_byte(record));
            if record.len() != self.header_len {
                return Err(self.ragged(line, record.len()));
            }
            // One UTF-8 check per record rather than one per field used.
            let all = std::str::from_utf8(record.as_slice()).unwrap_or("");
            let field = |col: usize| record.range(col).and_then(|r| all.get(r)).unwrap_or("");
            self.push_row(sink, line, columns, field)?;
        }
        Ok(())
    }

    /// The error for a row of `fields` fields at `line` when the header has another count.
    fn ragged(&self, line: u64, fields: usize) -> Error {
        Error::input_hint(
            self.loc.at_line(line),
            format!("this row has {fields} fields but the header has {}", self.header_len),
            format!(
                "fields are split by {}; check for a stray delimiter or an unclosed quote, or name the delimiter with --delimiter",
                text::delimiter_name(self.delimiter)
            ),
        )
    }

    /// Hands one row's fields (`field(col)`: the text of column `col`) to `sink`.
    fn push_row<'f>(
        &self,
        sink: &mut RowSink<'_>,
        line: u64,
        columns: &Columns,
        field: impl Fn(usize) -> &'f str,
    ) -> Result<()> {
        let (spec, loc) = (self.spec, self.loc);
        let mut factors = [Field::Text(""); MAX_FACTORS];
        for (slot, &col) in factors.iter_mut().zip(&columns.factors) {
            *slot = Field::Text(field(col));
        }
        let place = |role: Role| {
            let name = match role {
                Role::Outcome => spec.outcome.clone(),
                Role::Factor(f) => spec.factors[f].clone(),
                Role::Id => spec.id.clone().unwrap_or_default(),
            };
            loc.at_line(line).in_column(name)
        };
        sink.push(
            line,
            Field::Text(field(columns.outcome)),
            &factors[..spec.factors.len()],
            columns.id.map(|col| Field::Text(field(col))),
            &place,
        )
    }

    /// [`Ranges::read_rows`] for text with no quote character, without the CSV state
    /// machine: there, a record is a line (less a `\r` before its `\n`) cut at the
    /// delimiter, and an empty line is no record. `text` starts at a line start on line
    /// `first_line`.
    ///
    /// A `\r` elsewhere (the CSV reader ends a record there too) returns `Ok(false)` and
    /// leaves `sink` to be discarded: the caller reads the text again with the CSV
    /// reader. Rows are handed over as the CSV reader would, so the first error (a ragged
    /// row, a bad number, a repeated id) is the one it would report.
    fn read_plain_rows(&self, text: &str, first_line: u64, columns: &Columns, sink: &mut RowSink<'_>) -> Result<bool> {
        let bytes = text.as_bytes();
        let mut bounds: Vec<usize> = Vec::with_capacity(self.header_len + 1);
        let mut line = first_line;
        let mut start = 0;
        while start < bytes.len() {
            // One pass over the line: its end, its delimiters, any carriage return, and
            // whether every byte but the delimiters is whitespace.
            bounds.clear();
            bounds.push(start);
            let (mut end, mut returns, mut blank) = (start, 0usize, true);
            while end < bytes.len() && bytes[end] != b'\n' {
                let b = bytes[end];
                if b == self.delimiter {
                    bounds.push(end + 1);
                } else {
                    returns += usize::from(b == b'\r');
                    blank &= b.is_ascii_whitespace();
                }
                end += 1;
            }
            let next = end + 1;
            let content_end = if end > start && bytes[end - 1] == b'\r' {
                returns -= 1;
                end - 1
            } else {
                end
            };
            if returns > 0 {
                return Ok(false);
            }
            if content_end > start && !blank {
                if bounds.len() != self.header_len {
                    return Err(self.ragged(line, bounds.len()));
                }
                bounds.push(content_end + 1);
                let field = |col: usize| text.get(bounds[col]..bounds[col + 1] - 1).unwrap_or("");
                self.push_row(sink, line, columns, field)?;
            }
            line += 1;
            start = next;
        }
        Ok(true)
    }
}

fn check_spec(spec: &DataSpec) -> Result<()> {
    if spec.factors.is_empty() || spec.factors.len() > MAX_FACTORS {
        return Err(Error::usage(
            format!(
                "{} factors were named; quorum analyses designs with 1 to {MAX_FACTORS} factors",
                spec.factors.len()
            ),
            "name the factors with --factors A,B,...",
        ));
    }
    for f in &spec.factors {
        if f.contains(':') {
            return Err(Error::usage(
                format!(
                    "factor name `{f}` contains `:`, which quorum uses to join factor names into interaction terms"
                ),
                "rename the column in the file",
            ));
        }
    }
    for (i, f) in spec.factors.iter().enumerate() {
        if spec.factors[..i].contains(f) {
            return Err(Error::usage(format!("factor `{f}` is named twice in --factors"), "name each factor once"));
        }
        if *f == spec.outcome {
            return Err(Error::usage(
                format!("`{f}` is named both as the outcome and as a factor"),
                "the outcome is the measured response; factors are the grouping columns",
            ));
        }
    }
    if let Some(id) = &spec.id {
        if *id == spec.outcome || spec.factors.contains(id) {
            return Err(Error::usage(
                format!("the id column `{id}` is also the outcome or a factor"),
                "name a separate participant-id column",
            ));
        }
    }
    Ok(())
}

fn is_blank(record: &csv::ByteRecord) -> bool {
    record.iter().all(|f| f.iter().all(|b| b.is_ascii_whitespace()))
}

fn field_str(record: &csv::ByteRecord, col: usize) -> &str {
    // The whole file was checked to be UTF-8 and the delimiters are ASCII, so every
    // field is valid UTF-8; an empty string is a safe fallback that cannot occur.
    std::str::from_utf8(&record[col]).unwrap_or("")
}

fn header_names(record: &csv::ByteRecord) -> Vec<String> {
    (0..record.len()).map(|i| field_str(record, i).trim().to_string()).collect()
}

/// A CSV reader error at the line it names; the reader's lines count from its own text,
/// which starts after `lines_before` line ends of the body.
fn csv_error(e: csv::Error, bytes: &[u8], start: usize, lines_before: u64, loc: &Location) -> Error {
    let line = e.position().map(|p| p.line() + lines_before).unwrap_or_else(|| text::line_of(bytes, start));
    Error::input_hint(
        loc.at_line(line),
        format!("the file cannot be read as delimited text: {e}"),
        "check quoting on this line",
    )
}

/// Column indices of the outcome, factors and id in the header.
struct Columns {
    outcome: usize,
    factors: Vec<usize>,
    id: Option<usize>,
}

impl Columns {
    fn locate(header: &[String], spec: &DataSpec, loc: &Location, delimiter: u8) -> Result<Columns> {
        for (i, name) in header.iter().enumerate() {
            if !name.is_empty() && header[..i].contains(name) {
                return Err(Error::input_hint(
                    loc.clone(),
                    format!("column name `{name}` appears twice in the header"),
                    "give every column a distinct name",
                ));
            }
        }
        let find = |name: &str, role: &str| -> Result<usize> {
            header.iter().position(|h| h == name.trim()).ok_or_else(|| {
                let listing: Vec<String> = header.iter().filter(|h| !h.is_empty()).map(|h| format!("`{h}`")).collect();
                let close = header.iter().find(|h| h.to_lowercase() == name.trim().to_lowercase());
                let hint = match close {
                    Some(c) => {
                        format!("did you mean `{c}`? The columns are {}", listing.join(", "))
                    }
                    None => format!(
                        "the columns are {} (fields split by {})",
                        listing.join(", "),
                        text::delimiter_name(delimiter)
                    ),
                };
                Error::input_hint(loc.clone(), format!("there is no {role} column `{name}`"), hint)
            })
        };
        let outcome = find(&spec.outcome, "outcome")?;
        let factors = spec.factors.iter().map(|f| find(f, "factor")).collect::<Result<Vec<_>>>()?;
        let id = match &spec.id {
            Some(id) => Some(find(id, "id")?),
            None => None,
        };
        Ok(Columns { outcome, factors, id })
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::config::Source;

    fn spec(factors: &[&str]) -> DataSpec {
        DataSpec::new(Source::Stdin, "y", factors)
    }

    fn run(text: &str, spec: &DataSpec) -> Result<Observations> {
        parse(text.as_bytes(), spec, "t.csv", &Location::file("t.csv"))
    }

    #[test]
    fn reads_rows_with_lines_and_drops_missing() {
        let text = "y,a\r\n1.5,x\r\nNA,y\r\n\r\n2,\r\n3,y\r\n";
        let obs = run(text, &spec(&["a"])).unwrap();
        assert_eq!(obs.rows_read, 4);
        assert_eq!(obs.lines, vec![2, 6]);
        assert_eq!(obs.dropped.len(), 2);
        assert_eq!(obs.dropped[0], Dropped { line: 3, reason: "missing outcome `y`".into() });
        assert_eq!(obs.dropped[1].line, 5);
        assert_eq!(obs.factors[0].labels, vec!["x", "y"]);
        let values: Vec<f64> = obs.y.iter().map(|v| v + obs.location).collect();
        assert_eq!(values, vec![1.5, 3.0]);
    }

    #[test]
    fn quoted_multiline_fields_keep_line_numbers() {
        let text = "y,a\n1,\"x\ny\"\n2,z\n";
        let obs = run(text, &spec(&["a"])).unwrap();
        assert_eq!(obs.lines, vec![2, 4]);
    }

    #[test]
    fn errors_name_line_and_column() {
        let e = run("y,a\n1,x\n7;5,y\n", &spec(&["a"])).unwrap_err();
        assert_eq!(e.exit_code(), 2);
        let msg = e.to_string();
        assert!(msg.contains("line 3") && msg.contains("column `y`"), "{msg}");

        let e = run("y,a\n1,x\n2,y,3\n", &spec(&["a"])).unwrap_err();
        assert!(e.to_string().contains("line 3") && e.to_string().contains("3 fields"), "{e}");

        let e = run("y,a\n1,x\n", &spec(&["b"])).unwrap_err();
        assert!(e.to_string().contains("no factor column `b`"), "{e}");

        let e = run("y,a,a\n1,x,x\n", &spec(&["a"])).unwrap_err();
        assert!(e.to_string().contains("appears twice"), "{e}");

        let e = run("y,a\ninf,x\n", &spec(&["a"])).unwrap_err();
        assert!(e.to_string().contains("line 2"), "{e}");
        let e = run("y,a\n1e400,x\n", &spec(&["a"])).unwrap_err();
        assert!(e.to_string().contains("too large"), "{e}");
    }

    #[test]
    fn repeated_id_is_an_input_error() {
        let mut s = spec(&["a"]);
        s.id = Some("pid".into());
        let e = run("pid,y,a\n7,1,x\n8,2,y\n7,3,y\n", &s).unwrap_err();
        assert_eq!(e.exit_code(), 2);
        assert!(e.to_string().contains("line 4") && e.to_string().contains("line 2"), "{e}");
    }

    #[test]
    fn option_errors() {
        assert!(run("y,a\n1,x\n", &spec(&[])).is_err());
        assert!(run("y,a\n1,x\n", &spec(&["y"])).is_err());
        assert!(run("y,a:b\n1,x\n", &spec(&["a:b"])).is_err());
        assert!(run("y,a\n1,x\n", &spec(&["a", "a"])).is_err());
        assert!(run("y,a\n", &spec(&["a"])).is_err());
        assert!(run("y,a\nNA,x\n", &spec(&["a"])).is_err());
    }

    #[test]
    fn decimal_comma_with_semicolons() {
        let mut s = spec(&["a"]);
        s.decimal_comma = true;
        let obs = run("y;a\n7,5;x\n8;y\n", &s).unwrap();
        let values: Vec<f64> = obs.y.iter().map(|v| v + obs.location).collect();
        assert_eq!(values, vec![7.5, 8.0]);
    }
}
