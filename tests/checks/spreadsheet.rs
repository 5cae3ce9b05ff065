//! Spreadsheet input (.xlsx and .ods), with files the tests make themselves
//! (rust_xlsxwriter for .xlsx; a hand-built OpenDocument zip for .ods). Expected values:
//! the METHODS §12 invented data analysed from a spreadsheet give statsmodels' Type III F
//! (fixture classical.json, source statsmodels `anova_lm`); refused outcome cells stop the
//! run with exit 2 naming the sheet and cell (DESIGN.md input rules).

use crate::support::*;
use quorum::config::*;
use rust_xlsxwriter::{ExcelDateTime, Format as XlsxFormat, Workbook};
use std::io::Write;
use std::path::{Path, PathBuf};

/// METHODS §12.0 cells, in cell order a1b1 … a2b3 (invented data).
fn methods12() -> Vec<(&'static str, &'static str, f64)> {
    let cells: [(&str, &str, &[f64]); 6] = [
        ("a1", "b1", &[9.6, 10.2, 9.9, 10.0, 9.2]),
        ("a1", "b2", &[9.1, 9.8, 11.3, 9.7, 9.8, 12.1, 10.7]),
        ("a1", "b3", &[11.9, 12.0, 13.5, 15.0, 13.2, 16.2]),
        ("a2", "b1", &[13.8, 9.6, 9.4, 9.9, 9.2, 10.1, 9.8, 9.9]),
        ("a2", "b2", &[10.9, 11.6, 14.8, 14.9, 10.3, 12.6]),
        ("a2", "b3", &[13.4, 14.9, 18.5, 19.2, 12.1, 14.9, 17.6]),
    ];
    cells.iter().flat_map(|(a, b, ys)| ys.iter().map(move |&y| (*a, *b, y))).collect()
}

fn spec_for(path: &Path) -> DataSpec {
    DataSpec::new(Source::File(path.to_path_buf()), "y", &["A", "B"])
}

fn run(spec: DataSpec) -> quorum::Result<quorum::results::Analysis> {
    let config = Config {
        job: Job::Analyze,
        data: spec,
        settings: Settings { quiet: true, ..Settings::default() },
        output: OutputSpec { format: Format::Json, report_dir: None },
        command: "test".into(),
    };
    quorum::analysis::run(&config)
}

fn check_against_statsmodels(a: &quorum::results::Analysis) {
    let fix = fixture("classical");
    let classical = a.engines.iter().find(|e| e.engine == "classical").unwrap();
    for want in fix["methods12"]["type3"].as_array().unwrap() {
        let t = classical.terms.iter().find(|t| t.term == want["term"].as_str().unwrap()).unwrap();
        assert_stat(t.statistic.unwrap(), num(&want["F"]), "Type III F from a spreadsheet");
    }
}

/// A workbook with a title row above the header, the outcome in column C, one value
/// stored as text, one missing value, and `extra` written at C5 (the third data row).
fn xlsx(dir: &Path, extra: impl Fn(&mut rust_xlsxwriter::Worksheet)) -> PathBuf {
    let mut book = Workbook::new();
    let notes = book.add_worksheet();
    notes.set_name("notes").unwrap();
    notes.write_string(0, 0, "invented data for a test").unwrap();
    let sheet = book.add_worksheet();
    sheet.set_name("trial").unwrap();
    sheet.write_string(0, 0, "Invented trial, exported for analysis").unwrap();
    for (c, h) in ["A", "B", "y"].iter().enumerate() {
        sheet.write_string(1, c as u16, *h).unwrap();
    }
    let mut row = 2u32;
    for (i, (a, b, y)) in methods12().into_iter().enumerate() {
        sheet.write_string(row, 0, a).unwrap();
        sheet.write_string(row, 1, b).unwrap();
        if i == 4 {
            sheet.write_string(row, 2, format!("{y}")).unwrap(); // a number stored as text
        } else {
            sheet.write_number(row, 2, y).unwrap();
        }
        row += 1;
    }
    sheet.write_string(row, 0, "a1").unwrap();
    sheet.write_string(row, 1, "b1").unwrap();
    sheet.write_string(row, 2, "NA").unwrap();
    extra(sheet);
    let path = dir.join("trial.xlsx");
    book.save(&path).unwrap();
    path
}

#[test]
fn xlsx_reads_below_title_rows_and_matches_statsmodels() {
    let tmp = tempfile::tempdir().unwrap();
    let path = xlsx(tmp.path(), |_| {});
    let mut spec = spec_for(&path);
    spec.sheet = Some("trial".into());
    let a = run(spec.clone()).unwrap();
    assert_eq!(a.input.rows_used, 39);
    assert_eq!(a.input.dropped.len(), 1);
    assert_eq!(a.input.dropped[0].line, 42, "spreadsheet row number of the missing value");
    check_against_statsmodels(&a);
    spec.sheet = Some("2".into());
    assert_eq!(run(spec.clone()).unwrap().input.rows_used, 39, "sheet by 1-based position");
    spec.sheet = Some("results".into());
    let e = run(spec).unwrap_err();
    assert_eq!(e.exit_code(), 2);
    assert!(e.to_string().contains("\"trial\""), "{e}");
}

#[test]
fn refused_outcome_cells_name_sheet_and_cell() {
    let tmp = tempfile::tempdir().unwrap();
    let date = xlsx(tmp.path(), |s| {
        let f = XlsxFormat::new().set_num_format("yyyy-mm-dd");
        s.write_datetime_with_format(4, 2, ExcelDateTime::from_ymd(2026, 3, 1).unwrap(), &f).unwrap();
    });
    let mut spec = spec_for(&date);
    spec.sheet = Some("trial".into());
    let e = run(spec).unwrap_err();
    assert_eq!(e.exit_code(), 2);
    let msg = e.to_string();
    assert!(msg.contains("sheet \"trial\", cell C5") && msg.contains("date"), "{msg}");

    let formula = xlsx(tmp.path(), |s| {
        s.write_formula(4, 2, "=1+2").unwrap();
    });
    let mut spec = spec_for(&formula);
    spec.sheet = Some("trial".into());
    let e = run(spec).unwrap_err();
    assert!(e.to_string().contains("cell C5") && e.to_string().contains("formula"), "{e}");

    let text = xlsx(tmp.path(), |s| {
        s.write_string(4, 2, "about ten").unwrap();
    });
    let mut spec = spec_for(&text);
    spec.sheet = Some("trial".into());
    let e = run(spec).unwrap_err();
    assert!(e.to_string().contains("cell C5") && e.to_string().contains("not a number"), "{e}");
}

/// A minimal OpenDocument spreadsheet: mimetype (stored first), manifest, content.
fn ods(dir: &Path) -> PathBuf {
    use zip::write::SimpleFileOptions;
    let path = dir.join("trial.ods");
    let file = std::fs::File::create(&path).unwrap();
    let mut z = zip::ZipWriter::new(file);
    let stored = SimpleFileOptions::default().compression_method(zip::CompressionMethod::Stored);
    z.start_file("mimetype", stored).unwrap();
    z.write_all(b"application/vnd.oasis.opendocument.spreadsheet").unwrap();
    z.start_file("META-INF/manifest.xml", SimpleFileOptions::default()).unwrap();
    z.write_all(
        br#"<?xml version="1.0" encoding="UTF-8"?>
<manifest:manifest xmlns:manifest="urn:oasis:names:tc:opendocument:xmlns:manifest:1.0" manifest:version="1.2">
 <manifest:file-entry manifest:full-path="/" manifest:media-type="application/vnd.oasis.opendocument.spreadsheet"/>
 <manifest:file-entry manifest:full-path="content.xml" manifest:media-type="text/xml"/>
</manifest:manifest>"#,
    )
    .unwrap();
    let cell_s =
        |s: &str| format!(r#"<table:table-cell office:value-type="string"><text:p>{s}</text:p></table:table-cell>"#);
    let cell_f = |v: f64| {
        format!(
            r#"<table:table-cell office:value-type="float" office:value="{v}"><text:p>{v}</text:p></table:table-cell>"#
        )
    };
    let mut rows = format!("<table:table-row>{}{}{}</table:table-row>", cell_s("A"), cell_s("B"), cell_s("y"));
    for (a, b, y) in methods12() {
        rows.push_str(&format!("<table:table-row>{}{}{}</table:table-row>", cell_s(a), cell_s(b), cell_f(y)));
    }
    let content = format!(
        r#"<?xml version="1.0" encoding="UTF-8"?>
<office:document-content xmlns:office="urn:oasis:names:tc:opendocument:xmlns:office:1.0" xmlns:table="urn:oasis:names:tc:opendocument:xmlns:table:1.0" xmlns:text="urn:oasis:names:tc:opendocument:xmlns:text:1.0" office:version="1.2"><office:body><office:spreadsheet><table:table table:name="trial">{rows}</table:table></office:spreadsheet></office:body></office:document-content>"#
    );
    z.start_file("content.xml", SimpleFileOptions::default()).unwrap();
    z.write_all(content.as_bytes()).unwrap();
    z.finish().unwrap();
    path
}

#[test]
fn ods_reads_and_matches_statsmodels() {
    let tmp = tempfile::tempdir().unwrap();
    let path = ods(tmp.path());
    let a = run(spec_for(&path)).unwrap();
    assert_eq!(a.input.rows_used, 39);
    check_against_statsmodels(&a);
}
