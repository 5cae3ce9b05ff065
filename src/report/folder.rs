//! Report folders: written atomically, and only where quorum may write.
//!
//! A report folder carries a marker file ([`MARKER`]). quorum writes into a folder
//! only when it is new, empty, or carries the marker, so `quorum demo` can run again
//! while a folder of the user's is never touched. Every file is written to a temporary
//! name in the same folder and renamed into place, so a crash never leaves half a file,
//! and no output may be the input file.

use crate::error::{Error, Result};
use std::fs;
use std::io::Write;
use std::path::{Path, PathBuf};

/// The marker file that makes a folder quorum's to overwrite.
pub const MARKER: &str = ".quorum-report";

/// Checks that quorum may write into `dir` and creates it with its marker.
///
/// # Errors
/// A usage error when `dir` is a file, or a non-empty folder without the marker;
/// an I/O error when it cannot be created.
pub fn prepare(dir: &Path) -> Result<()> {
    if dir.exists() {
        if !dir.is_dir() {
            return Err(Error::usage(
                format!("the report folder `{}` is an existing file", dir.display()),
                "name a new folder for --report",
            ));
        }
        let marker = dir.join(MARKER).exists();
        let empty = fs::read_dir(dir).map_err(|e| io_error(dir, "reading the folder", e))?.next().is_none();
        if !marker && !empty {
            return Err(Error::usage(
                format!("the folder `{}` is not empty and was not written by quorum", dir.display()),
                "quorum only overwrites folders it made itself; name a new or empty folder for --report",
            ));
        }
    } else {
        fs::create_dir_all(dir).map_err(|e| io_error(dir, "creating the folder", e))?;
    }
    write_atomic(
        &dir.join(MARKER),
        format!("This folder was written by quorum {}; quorum may overwrite it.\n", env!("CARGO_PKG_VERSION"))
            .as_bytes(),
        None,
    )
}

fn io_error(path: &Path, action: &'static str, source: std::io::Error) -> Error {
    Error::Io { path: path.display().to_string(), action, source }
}

/// Writes `contents` to `path` atomically (temporary file in the same folder, then
/// rename). Refuses to write over `input`.
///
/// # Errors
/// A usage error when `path` is the input file; an I/O error otherwise.
pub fn write_atomic(path: &Path, contents: &[u8], input: Option<&Path>) -> Result<()> {
    if let Some(input) = input {
        if same_file(path, input) {
            return Err(Error::usage(
                format!("`{}` is the input file; quorum never writes over its input", path.display()),
                "choose another report folder",
            ));
        }
    }
    let dir = path.parent().unwrap_or(Path::new("."));
    let name = path.file_name().map(|n| n.to_string_lossy().into_owned()).unwrap_or_default();
    let tmp: PathBuf = dir.join(format!(".{name}.tmp-{}", std::process::id()));
    let result = (|| {
        let mut f = fs::File::create(&tmp)?;
        f.write_all(contents)?;
        f.sync_all()?;
        fs::rename(&tmp, path)
    })();
    if let Err(e) = result {
        let _ = fs::remove_file(&tmp);
        return Err(io_error(path, "writing", e));
    }
    Ok(())
}

fn same_file(a: &Path, b: &Path) -> bool {
    match (fs::canonicalize(a), fs::canonicalize(b)) {
        (Ok(x), Ok(y)) => x == y,
        _ => false,
    }
}

/// Writes the report folder for `analysis`: `results.json`, `report.txt`, `report.md`, the CSV
/// tables (`terms.csv`, `cells.csv`, `marginal-means.csv`, `verdicts.csv`), the marker, and
/// ([`write_visual`]) `report.html` with `plots/*.svg`.
/// Returns the files written.
///
/// # Errors
/// As [`prepare`] and [`write_atomic`].
pub fn write_report(dir: &Path, analysis: &crate::results::Analysis, input: Option<&Path>) -> Result<Vec<PathBuf>> {
    use super::{json::Json, text::Text, to_string};
    prepare(dir)?;
    let files = [
        ("results.json", to_string(&Json, analysis)),
        ("report.txt", to_string(&Text, analysis)),
        ("report.md", to_string(&super::markdown::Markdown, analysis)),
        ("terms.csv", super::csv::terms_table(analysis)),
        ("cells.csv", super::csv::cells_table(analysis)),
        ("marginal-means.csv", super::csv::marginal_means_table(analysis)),
        ("verdicts.csv", super::csv::concordance_table(analysis)),
    ];
    let mut written = Vec::new();
    for (name, body) in files {
        let path = dir.join(name);
        write_atomic(&path, body.as_bytes(), input)?;
        written.push(path);
    }
    written.extend(write_visual(dir, analysis, input)?);
    Ok(written)
}

/// Writes `report.html` and `plots/*.svg` into a prepared report folder; SVG files
/// left in `plots/` by an earlier run that this run does not write are removed (the
/// folder carries quorum's marker, so they are quorum's). Returns the files written.
///
/// # Errors
/// As [`write_atomic`]; an I/O error when `plots/` cannot be created or cleaned.
pub fn write_visual(dir: &Path, analysis: &crate::results::Analysis, input: Option<&Path>) -> Result<Vec<PathBuf>> {
    let plots = super::plots::all(analysis);
    let plot_dir = dir.join("plots");
    fs::create_dir_all(&plot_dir).map_err(|e| io_error(&plot_dir, "creating the folder", e))?;
    let mut written = Vec::new();
    for p in &plots {
        let path = plot_dir.join(&p.file);
        write_atomic(&path, p.svg.as_bytes(), input)?;
        written.push(path);
    }
    let entries = fs::read_dir(&plot_dir).map_err(|e| io_error(&plot_dir, "reading the folder", e))?;
    for entry in entries.flatten() {
        let path = entry.path();
        let ours = path.extension().is_some_and(|x| x == "svg") && path.is_file();
        if ours && !written.contains(&path) {
            fs::remove_file(&path).map_err(|e| io_error(&path, "removing an old plot", e))?;
        }
    }
    let html = super::html::Html { plots: &plots };
    let path = dir.join("report.html");
    write_atomic(&path, super::to_string(&html, analysis).as_bytes(), input)?;
    written.push(path);
    Ok(written)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn refuses_a_users_folder_and_reuses_its_own() {
        let tmp = tempfile::tempdir().unwrap();
        let users = tmp.path().join("mine");
        fs::create_dir(&users).unwrap();
        fs::write(users.join("notes.txt"), "keep me").unwrap();
        assert_eq!(prepare(&users).unwrap_err().exit_code(), 2);
        assert_eq!(fs::read_to_string(users.join("notes.txt")).unwrap(), "keep me");

        let ours = tmp.path().join("report");
        prepare(&ours).unwrap();
        write_atomic(&ours.join("results.json"), b"{}", None).unwrap();
        prepare(&ours).unwrap();
        assert!(ours.join(MARKER).exists());

        let file = tmp.path().join("plain.txt");
        fs::write(&file, "x").unwrap();
        assert!(prepare(&file).is_err());
    }

    #[test]
    fn never_writes_over_the_input() {
        let tmp = tempfile::tempdir().unwrap();
        let input = tmp.path().join("data.csv");
        fs::write(&input, "y,a\n").unwrap();
        assert!(write_atomic(&input, b"oops", Some(&input)).is_err());
        assert_eq!(fs::read_to_string(&input).unwrap(), "y,a\n");
    }
}
