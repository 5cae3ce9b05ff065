//! Reading spreadsheets (.xlsx, .xlsm, .xls, .ods) with the `calamine` crate.
//!
//! A sheet is turned into the same typed rows as a delimited file ([`super::rows`]), so
//! every rule (missing tokens, labels, ids, exact decimals) is shared. What is special
//! here: choosing the sheet (`--sheet NAME|INDEX`), finding the header row below any
//! title rows, numbers stored as text (accepted), and cells the outcome must not hold —
//! dates, formulas, TRUE/FALSE and error values — which stop the run naming the sheet
//! and the cell reference (`sheet "trial", cell C214`). Row numbers play the role of
//! line numbers in every message and in the results.

use super::rows::{Field, Role, RowSink};
use super::Observations;
use crate::config::DataSpec;
use crate::error::{Error, Location, Result};
use calamine::{Data, Range, Reader};
use std::io::Cursor;

/// Rows searched for the header (title rows above it are skipped).
const HEADER_SEARCH_ROWS: usize = 50;

/// True when the bytes are a ZIP container (xlsx, ods) or an OLE compound file (xls).
pub fn looks_like_spreadsheet(bytes: &[u8]) -> bool {
    bytes.starts_with(b"PK\x03\x04") || bytes.starts_with(&[0xD0, 0xCF, 0x11, 0xE0, 0xA1, 0xB1, 0x1A, 0xE1])
}

/// Column letters of a 0-based column index (0 → A, 26 → AA).
pub fn column_letters(mut col: u32) -> String {
    let mut out = Vec::new();
    loop {
        out.push(b'A' + (col % 26) as u8);
        if col < 26 {
            break;
        }
        col = col / 26 - 1;
    }
    out.reverse();
    String::from_utf8(out).unwrap_or_default()
}

/// Reads the chosen sheet of a workbook given as bytes.
///
/// # Errors
/// Exit-2 input errors: unreadable workbook, unknown sheet, no header row naming the
/// columns, or a refused outcome cell (named by sheet and cell reference).
pub fn parse(bytes: &[u8], spec: &DataSpec, source: &str, loc: &Location) -> Result<Observations> {
    let mut book = calamine::open_workbook_auto_from_rs(Cursor::new(bytes)).map_err(|e| {
        Error::input_hint(
            loc.clone(),
            format!("the spreadsheet cannot be read: {e}"),
            "save it again as .xlsx or .ods, or export the sheet as CSV",
        )
    })?;
    let names = book.sheet_names();
    let sheet = choose_sheet(&names, spec.sheet.as_deref(), loc)?;
    let sheet_loc = Location { sheet: Some(sheet.clone()), ..loc.clone() };
    let range = book.worksheet_range(&sheet).map_err(|e| {
        Error::input_hint(sheet_loc.clone(), format!("the sheet cannot be read: {e}"), "export the sheet as CSV")
    })?;
    // Formulas are optional metadata: a reader that cannot give them gives none.
    let formulas = book.worksheet_formula(&sheet).ok();
    let (row0, col0) = range.start().unwrap_or((0, 0));
    let rows: Vec<&[Data]> = range.rows().collect();
    let texts: Vec<Vec<String>> = rows
        .iter()
        .take(HEADER_SEARCH_ROWS)
        .map(|r| r.iter().map(|c| c.to_string().trim().to_string()).collect())
        .collect();
    let mut wanted: Vec<&str> = vec![spec.outcome.as_str()];
    wanted.extend(spec.factors.iter().map(String::as_str));
    if let Some(id) = &spec.id {
        wanted.push(id);
    }
    let Some(header_idx) = texts.iter().position(|r| wanted.iter().all(|w| r.iter().any(|h| h == w.trim()))) else {
        let first = texts.iter().find(|r| r.iter().any(|c| !c.is_empty()));
        let shown = first.map(|r| r.iter().filter(|c| !c.is_empty()).cloned().collect::<Vec<_>>().join(", "));
        return Err(Error::input_hint(
            sheet_loc,
            format!("no row among the first {HEADER_SEARCH_ROWS} names all of the columns {}", wanted.join(", ")),
            match shown {
                Some(s) => format!("the first filled row reads: {s}; check the column names and --sheet"),
                None => "the sheet is empty; choose another with --sheet".into(),
            },
        ));
    };
    let header = &texts[header_idx];
    for (i, name) in header.iter().enumerate() {
        if !name.is_empty() && header[..i].contains(name) && wanted.contains(&name.as_str()) {
            return Err(Error::input_hint(
                sheet_loc.clone(),
                format!("column name `{name}` appears twice in the header row"),
                "give every column a distinct name",
            ));
        }
    }
    let find = |name: &str| header.iter().position(|h| h == name.trim()).unwrap_or(0);
    let outcome_col = find(&spec.outcome);
    let factor_cols: Vec<usize> = spec.factors.iter().map(|f| find(f)).collect();
    let id_col = spec.id.as_ref().map(|id| find(id));

    let mut sink = RowSink::new(spec);
    for (k, row) in rows.iter().enumerate().skip(header_idx + 1) {
        if row.iter().all(|c| matches!(c, Data::Empty) || c.to_string().trim().is_empty()) {
            continue;
        }
        let abs_row = row0 + k as u32;
        let line = abs_row as u64 + 1;
        let cell_ref = |col: usize| format!("{}{}", column_letters(col0 + col as u32), line);
        let cell = |col: usize| row.get(col).unwrap_or(&Data::Empty);
        let shown: Vec<String> = (0..row.len()).map(|c| cell(c).to_string()).collect();
        let formula_at = |col: usize| {
            formulas
                .as_ref()
                .and_then(|f: &Range<String>| f.get_value((abs_row, col0 + col as u32)))
                .filter(|s| !s.is_empty())
                .cloned()
        };
        let outcome_formula = formula_at(outcome_col).map(|f| format!("={f}"));
        let outcome = match &outcome_formula {
            Some(f) => Field::Refused("a formula", f),
            None => field(cell(outcome_col), &shown[..], outcome_col),
        };
        let factors: Vec<Field<'_>> = factor_cols.iter().map(|&c| factor_field(cell(c), &shown, c)).collect();
        let id = id_col.map(|c| factor_field(cell(c), &shown, c));
        let place = |role: Role| {
            let col = match role {
                Role::Outcome => outcome_col,
                Role::Factor(f) => factor_cols[f],
                Role::Id => id_col.unwrap_or(0),
            };
            Location { cell: Some(cell_ref(col)), ..sheet_loc.clone() }
        };
        sink.push(line, outcome, &factors, id, &place)?;
    }
    sink.finish(source, &sheet_loc, b',')
}

fn choose_sheet(names: &[String], wanted: Option<&str>, loc: &Location) -> Result<String> {
    let listing = names.iter().map(|n| format!("\"{n}\"")).collect::<Vec<_>>().join(", ");
    match wanted {
        None => names.first().cloned().ok_or_else(|| Error::input(loc.clone(), "the workbook has no sheets")),
        Some(w) => {
            if let Some(n) = names.iter().find(|n| n.as_str() == w) {
                return Ok(n.clone());
            }
            if let Ok(i) = w.parse::<usize>() {
                if i >= 1 && i <= names.len() {
                    return Ok(names[i - 1].clone());
                }
            }
            Err(Error::input_hint(
                loc.clone(),
                format!("the workbook has no sheet \"{w}\""),
                format!("give --sheet a name or a 1-based position; the sheets are {listing}"),
            ))
        }
    }
}

/// The field of an outcome cell.
fn field<'a>(d: &'a Data, shown: &'a [String], col: usize) -> Field<'a> {
    let s = shown.get(col).map(String::as_str).unwrap_or("");
    match d {
        Data::Empty => Field::Text(""),
        Data::String(t) => Field::Text(t),
        Data::Float(v) => Field::Number(*v, s),
        Data::Int(v) => Field::Number(*v as f64, s),
        Data::Bool(_) => Field::Refused("a TRUE/FALSE value", s),
        Data::DateTime(_) | Data::DateTimeIso(_) => Field::Refused("a date or time", s),
        Data::DurationIso(_) => Field::Refused("a duration", s),
        Data::Error(_) => Field::Refused("an error value", s),
    }
}

/// The field of a factor or id cell: every kind of value is a label (its display form).
fn factor_field<'a>(d: &'a Data, shown: &'a [String], col: usize) -> Field<'a> {
    match d {
        Data::Empty => Field::Text(""),
        Data::String(t) => Field::Text(t),
        _ => Field::Text(shown.get(col).map(String::as_str).unwrap_or("")),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn column_letters_follow_spreadsheet_naming() {
        assert_eq!(column_letters(0), "A");
        assert_eq!(column_letters(2), "C");
        assert_eq!(column_letters(25), "Z");
        assert_eq!(column_letters(26), "AA");
        assert_eq!(column_letters(701), "ZZ");
        assert_eq!(column_letters(702), "AAA");
    }
}
