//! Typed errors and the exit codes they map to.
//!
//! Three kinds of failure reach the user (DESIGN.md "Rules every part follows"):
//! an input or usage problem (exit 2: the message names the file, line and column and
//! says what to do), an analysis that these data cannot support (exit 3), and a failed
//! internal consistency check (exit 4: a bug). Cell- or engine-level degeneracy is not
//! an error: it travels as `not_applicable` data in the results.

use std::fmt;

/// Where in the input a problem sits. Every part is optional; whatever is known is printed.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct Location {
    /// The input file as the user named it (`<stdin>` for standard input).
    pub file: Option<String>,
    /// 1-based line number in the input file.
    pub line: Option<u64>,
    /// Column (header) name.
    pub column: Option<String>,
    /// Spreadsheet sheet name.
    pub sheet: Option<String>,
    /// Spreadsheet cell reference, e.g. `C214` (replaces line and column when present).
    pub cell: Option<String>,
}

impl Location {
    /// A location in `file`.
    pub fn file(file: impl Into<String>) -> Self {
        Location { file: Some(file.into()), ..Default::default() }
    }

    /// The same location at `line`.
    pub fn at_line(&self, line: u64) -> Self {
        Location { line: Some(line), ..self.clone() }
    }

    /// The same location in `column`.
    pub fn in_column(&self, column: impl Into<String>) -> Self {
        Location { column: Some(column.into()), ..self.clone() }
    }

    fn is_empty(&self) -> bool {
        self.file.is_none()
            && self.line.is_none()
            && self.column.is_none()
            && self.sheet.is_none()
            && self.cell.is_none()
    }
}

impl fmt::Display for Location {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let mut parts = Vec::new();
        if let Some(file) = &self.file {
            parts.push(file.clone());
        }
        if let Some(sheet) = &self.sheet {
            parts.push(format!("sheet \"{sheet}\""));
        }
        if let Some(cell) = &self.cell {
            parts.push(format!("cell {cell}"));
        } else {
            if let Some(line) = self.line {
                parts.push(format!("line {line}"));
            }
            if let Some(column) = &self.column {
                parts.push(format!("column `{column}`"));
            }
        }
        write!(f, "{}", parts.join(", "))
    }
}

/// Every failure the library reports. The binary prints it and exits with [`Error::exit_code`].
#[derive(Debug, thiserror::Error)]
pub enum Error {
    /// The input data or the options are unusable as given (exit 2).
    #[error("{}", input_message(.location, .problem, .hint))]
    Input {
        /// Where the problem is (boxed to keep `Result`s small).
        location: Box<Location>,
        /// What is wrong, in plain words.
        problem: String,
        /// What the user can do about it.
        hint: Option<String>,
    },
    /// A file could not be read or written (exit 2).
    #[error("{path}: {action} failed: {source}")]
    Io {
        /// The path involved.
        path: String,
        /// "reading", "writing", "creating the folder", …
        action: &'static str,
        /// The operating system's error.
        #[source]
        source: std::io::Error,
    },
    /// The data are valid but cannot support the analysis (exit 3), e.g. an empty cell.
    #[error("analysis impossible: {reason}")]
    Impossible {
        /// Why, naming the cell, factor or term involved.
        reason: String,
    },
    /// A failed internal consistency check: a bug in quorum (exit 4).
    #[error("internal consistency check failed: {check}. This is a bug in quorum; please report it with the command and, if you can, the data")]
    Internal {
        /// Which check failed and by how much.
        check: String,
    },
}

fn input_message(location: &Location, problem: &str, hint: &Option<String>) -> String {
    let mut s = String::new();
    if !location.is_empty() {
        s.push_str(&location.to_string());
        s.push_str(": ");
    }
    s.push_str(problem);
    if let Some(h) = hint {
        s.push_str(" (");
        s.push_str(h);
        s.push(')');
    }
    s
}

impl Error {
    /// An input or usage error at `location`.
    pub fn input(location: Location, problem: impl Into<String>) -> Self {
        Error::Input { location: Box::new(location), problem: problem.into(), hint: None }
    }

    /// An input or usage error with a hint on what to do.
    pub fn input_hint(location: Location, problem: impl Into<String>, hint: impl Into<String>) -> Self {
        Error::Input { location: Box::new(location), problem: problem.into(), hint: Some(hint.into()) }
    }

    /// A usage error in the options (no file location).
    pub fn usage(problem: impl Into<String>, hint: impl Into<String>) -> Self {
        Error::input_hint(Location::default(), problem, hint)
    }

    /// The analysis cannot be done on these data.
    pub fn impossible(reason: impl Into<String>) -> Self {
        Error::Impossible { reason: reason.into() }
    }

    /// A failed internal consistency check.
    pub fn internal(check: impl Into<String>) -> Self {
        Error::Internal { check: check.into() }
    }

    /// The process exit code for this error (documented in the README).
    pub fn exit_code(&self) -> i32 {
        match self {
            Error::Input { .. } | Error::Io { .. } => 2,
            Error::Impossible { .. } => 3,
            Error::Internal { .. } => 4,
        }
    }
}

/// The library's result type.
pub type Result<T> = std::result::Result<T, Error>;

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn input_message_names_file_line_column_and_hint() {
        let loc = Location::file("trial.csv").at_line(214).in_column("score");
        let e = Error::input_hint(loc, "`7,5` is not a number", "use --decimal-comma if the file uses decimal commas");
        assert_eq!(
            e.to_string(),
            "trial.csv, line 214, column `score`: `7,5` is not a number (use --decimal-comma if the file uses decimal commas)"
        );
        assert_eq!(e.exit_code(), 2);
    }

    #[test]
    fn exit_codes_follow_the_design() {
        assert_eq!(Error::impossible("empty cell").exit_code(), 3);
        assert_eq!(Error::internal("alignment").exit_code(), 4);
    }
}
