//! Turning rows into observations, whatever the file format.
//!
//! Delimited text and spreadsheets both hand each data row to a [`RowSink`] as typed
//! [`Field`]s. The sink applies the rules every format shares: missing-value tokens,
//! label interning (exact spelling kept), number parsing with exact decimals, the
//! repeated-id check, and provenance (the row's line or spreadsheet row number).

use super::number::{centre_exactly, parse_number, Decimal};
use super::{Dropped, FactorColumn, Observations};
use crate::config::DataSpec;
use crate::error::{Error, Location, Result};
use std::collections::HashMap;

/// One cell of a row, as the reader found it.
#[derive(Debug, Clone, Copy)]
pub enum Field<'a> {
    /// Text as written (delimited files; text cells of spreadsheets).
    Text(&'a str),
    /// A number stored as a number (spreadsheets), with its shortest decimal spelling.
    Number(f64, &'a str),
    /// A value quorum refuses in the outcome column: (what it is, how it shows).
    Refused(&'static str, &'a str),
}

/// Which column of the row a field came from (for error locations).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Role {
    /// The outcome column.
    Outcome,
    /// Factor number k.
    Factor(usize),
    /// The participant-id column.
    Id,
}

/// The missing-value tokens, compared with a field after trimming ASCII whitespace.
struct MissingTokens {
    tokens: Vec<Vec<u8>>,
    longest: usize,
}

impl MissingTokens {
    fn new(tokens: &[String]) -> Self {
        let tokens: Vec<Vec<u8>> = tokens.iter().map(|t| t.trim().as_bytes().to_vec()).collect();
        let longest = tokens.iter().map(Vec::len).max().unwrap_or(0);
        MissingTokens { tokens, longest }
    }

    fn contains(&self, field: &Field<'_>) -> bool {
        match field {
            Field::Text(s) => {
                let t = s.as_bytes().trim_ascii();
                t.len() <= self.longest && self.tokens.iter().any(|tok| tok.as_slice() == t)
            }
            Field::Number(..) | Field::Refused(..) => false,
        }
    }
}

/// Codes of a factor's distinct labels: a linear scan while there are few labels (the
/// usual case, faster than hashing), a hash map beyond that.
#[derive(Default)]
struct Interner {
    few: Vec<(Box<str>, u32)>,
    many: HashMap<Box<str>, u32>,
}

/// Labels kept in the linear list before switching to the hash map.
const FEW_LABELS: usize = 16;

impl Interner {
    fn get(&self, label: &str) -> Option<u32> {
        if self.many.is_empty() {
            // Labels are short: comparing bytes in place beats a call to `memcmp`.
            let label = label.as_bytes();
            self.few
                .iter()
                .find(|(l, _)| l.len() == label.len() && l.bytes().zip(label).all(|(a, &b)| a == b))
                .map(|&(_, c)| c)
        } else {
            self.many.get(label).copied()
        }
    }

    /// Adds a new label and returns its code (codes count up from 0).
    fn insert(&mut self, label: &str) -> u32 {
        let code = (self.few.len() + self.many.len()) as u32;
        if self.many.is_empty() && self.few.len() < FEW_LABELS {
            self.few.push((label.into(), code));
        } else {
            if self.many.is_empty() {
                self.many.extend(self.few.drain(..));
            }
            self.many.insert(label.into(), code);
        }
        code
    }
}

/// The label of a factor field (numbers stored as numbers use their shortest spelling).
fn label_of<'a>(field: &Field<'a>) -> &'a str {
    match *field {
        Field::Text(s) | Field::Number(_, s) | Field::Refused(_, s) => s,
    }
}

/// The error for a participant id met again at `place`, first seen at line `first`.
fn repeated_id(place: Location, key: &str, first: u64) -> Error {
    Error::input_hint(
        place,
        format!("participant id `{key}` also appears at line {first}"),
        "quorum analyses between-subjects designs: one row per participant. Repeated measures analysed as independent rows give pseudo-replicated p-values",
    )
}

/// Accumulates rows into [`Observations`].
pub struct RowSink<'s> {
    spec: &'s DataSpec,
    missing: MissingTokens,
    factors: Vec<FactorColumn>,
    intern: Vec<Interner>,
    ids: HashMap<Box<str>, u64>,
    values: Vec<f64>,
    decimals: Vec<Option<Decimal>>,
    lines: Vec<u64>,
    dropped: Vec<Dropped>,
    rows_read: usize,
    codes: Vec<u32>,
}

impl<'s> RowSink<'s> {
    /// An empty sink for the columns of `spec`.
    pub fn new(spec: &'s DataSpec) -> Self {
        let nf = spec.factors.len();
        RowSink {
            spec,
            missing: MissingTokens::new(&spec.missing),
            factors: spec
                .factors
                .iter()
                .map(|name| FactorColumn {
                    name: name.clone(),
                    labels: Vec::new(),
                    first_line: Vec::new(),
                    codes: Vec::new(),
                })
                .collect(),
            intern: (0..nf).map(|_| Interner::default()).collect(),
            ids: HashMap::new(),
            values: Vec::new(),
            decimals: Vec::new(),
            lines: Vec::new(),
            dropped: Vec::new(),
            rows_read: 0,
            codes: vec![0; nf],
        }
    }

    /// Makes room for `rows` more rows (a hint: the count of line ends ahead), so that
    /// the columns do not grow by repeated copying.
    pub(crate) fn reserve(&mut self, rows: usize) {
        self.values.reserve(rows);
        self.decimals.reserve(rows);
        self.lines.reserve(rows);
        for col in &mut self.factors {
            col.codes.reserve(rows);
        }
    }

    /// Adds one data row. `place(role)` gives the error location of a column of this row.
    ///
    /// # Errors
    /// A non-numeric or refused outcome, or a repeated participant id (exit 2).
    pub fn push(
        &mut self,
        line: u64,
        outcome: Field<'_>,
        factors: &[Field<'_>],
        id: Option<Field<'_>>,
        place: &dyn Fn(Role) -> Location,
    ) -> Result<()> {
        self.rows_read += 1;
        if self.missing.contains(&outcome) {
            self.dropped.push(Dropped { line, reason: format!("missing outcome `{}`", self.spec.outcome) });
            return Ok(());
        }
        for (f, field) in factors.iter().enumerate() {
            if self.missing.contains(field) {
                self.dropped.push(Dropped { line, reason: format!("missing factor `{}`", self.spec.factors[f]) });
                return Ok(());
            }
            let label = label_of(field);
            self.codes[f] = match self.intern[f].get(label) {
                Some(code) => code,
                None => {
                    let code = self.intern[f].insert(label);
                    self.factors[f].labels.push(label.to_string());
                    self.factors[f].first_line.push(line);
                    code
                }
            };
        }
        let (value, decimal) =
            match outcome {
                Field::Text(s) => {
                    let trimmed = s.trim();
                    parse_number(trimmed, self.spec.decimal_comma).map_err(|problem| {
                        let (what, hint) = problem.explain(trimmed);
                        Error::input_hint(place(Role::Outcome), what, hint)
                    })?
                }
                Field::Number(v, spelling) => {
                    let decimal = parse_number(spelling, false).ok().and_then(|(_, d)| d);
                    (v, decimal)
                }
                Field::Refused(what, shown) => return Err(Error::input_hint(
                    place(Role::Outcome),
                    format!("the outcome cell holds {what} (`{shown}`), not a number"),
                    "store the outcome as plain numbers (for formulas: paste the values), or mark the cell as missing",
                )),
            };
        if let Some(id) = id {
            if !self.missing.contains(&id) {
                let key = label_of(&id);
                if let Some(&first) = self.ids.get(key) {
                    return Err(repeated_id(place(Role::Id), key, first));
                }
                self.ids.insert(key.into(), line);
            }
        }
        for (f, col) in self.factors.iter_mut().enumerate() {
            col.codes.push(self.codes[f]);
        }
        self.values.push(value);
        self.decimals.push(decimal);
        self.lines.push(line);
        Ok(())
    }

    /// Appends the rows of `later`, a sink that read the part of the same file right after
    /// the rows of `self` (parallel reading, `data::parallel`). Labels new to `self` get the
    /// next codes in `later`'s first-appearance order, so codes, labels and their first
    /// lines are those one sink reading both parts would give. Participant ids are not
    /// merged: [`RowSink::first_repeat`] checks them across parts beforehand.
    pub(crate) fn absorb(&mut self, later: RowSink<'_>) {
        for ((col, intern), part) in self.factors.iter_mut().zip(&mut self.intern).zip(later.factors) {
            let map: Vec<u32> = part
                .labels
                .iter()
                .zip(&part.first_line)
                .map(|(label, &line)| match intern.get(label) {
                    Some(code) => code,
                    None => {
                        col.labels.push(label.clone());
                        col.first_line.push(line);
                        intern.insert(label)
                    }
                })
                .collect();
            col.codes.extend(part.codes.iter().map(|&c| map[c as usize]));
        }
        self.values.extend_from_slice(&later.values);
        self.decimals.extend_from_slice(&later.decimals);
        self.lines.extend_from_slice(&later.lines);
        self.dropped.extend(later.dropped);
        self.rows_read += later.rows_read;
    }

    /// The first row of this sink (in line order) whose participant id one of `earlier`
    /// (sinks of the preceding parts of the file, in file order) already holds, as the
    /// error one sink reading all parts would have raised there.
    pub(crate) fn first_repeat(&self, earlier: &[&RowSink<'_>], loc: &Location) -> Option<Error> {
        if earlier.iter().all(|s| s.ids.is_empty()) {
            return None;
        }
        let (key, line, first) = self
            .ids
            .iter()
            .filter_map(|(key, &line)| {
                let first = earlier.iter().find_map(|s| s.ids.get(key).copied())?;
                Some((key, line, first))
            })
            .min_by_key(|&(_, line, _)| line)?;
        let column = self.spec.id.clone().unwrap_or_default();
        Some(repeated_id(loc.at_line(line).in_column(column), key, first))
    }

    /// The observations read, centred exactly.
    ///
    /// # Errors
    /// No data rows, or every row has a missing value (exit 2).
    pub fn finish(self, source: &str, loc: &Location, delimiter: u8) -> Result<Observations> {
        if self.values.is_empty() {
            let why = if self.rows_read == 0 {
                "the file has a header but no data rows".to_string()
            } else {
                format!("all {} data rows miss the outcome or a factor value", self.rows_read)
            };
            return Err(Error::input_hint(loc.clone(), why, "check the column names and the --missing tokens"));
        }
        let (y, location) = centre_exactly(&self.values, &self.decimals);
        Ok(Observations {
            source: source.to_string(),
            outcome: self.spec.outcome.clone(),
            y,
            location,
            factors: self.factors,
            lines: self.lines,
            rows_read: self.rows_read,
            dropped: self.dropped,
            delimiter,
        })
    }
}
