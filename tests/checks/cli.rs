//! The real binary, run through a small harness with a temporary folder per test:
//! exit codes (README "Exit codes"; DESIGN.md rules), messages that name the line and
//! column, the JSON contract (checked by ../shared/tools/check_results.py, the
//! project's contract checker, when Python is available) and report folders.
//! These are behaviour tests of the command line; expected values are the documented
//! contract, not statistics.

use crate::support::repo_path;
use std::io::Write;
use std::path::Path;
use std::process::{Command, Stdio};

struct Out {
    code: i32,
    stdout: String,
    stderr: String,
}

fn quorum(args: &[&str], cwd: &Path, stdin: Option<&str>) -> Out {
    let mut cmd = Command::new(env!("CARGO_BIN_EXE_quorum"));
    cmd.args(args).current_dir(cwd).stdout(Stdio::piped()).stderr(Stdio::piped());
    cmd.stdin(if stdin.is_some() { Stdio::piped() } else { Stdio::null() });
    let mut child = cmd.spawn().expect("spawn quorum");
    if let Some(text) = stdin {
        child.stdin.take().unwrap().write_all(text.as_bytes()).unwrap();
    }
    let out = child.wait_with_output().unwrap();
    Out {
        code: out.status.code().unwrap_or(-1),
        stdout: String::from_utf8_lossy(&out.stdout).into_owned(),
        stderr: String::from_utf8_lossy(&out.stderr).into_owned(),
    }
}

fn write(dir: &Path, name: &str, text: &str) -> String {
    std::fs::write(dir.join(name), text).unwrap();
    name.to_string()
}

fn contract_checker() -> Option<std::path::PathBuf> {
    let p = repo_path("../shared/tools/check_results.py");
    let python = Command::new("python3").arg("--version").output().is_ok();
    (p.exists() && python).then_some(p)
}

#[test]
fn demo_writes_a_report_folder_and_can_run_again() {
    let tmp = tempfile::tempdir().unwrap();
    let first = quorum(&["demo"], tmp.path(), None);
    assert_eq!(first.code, 0, "{}", first.stderr);
    assert!(first.stdout.contains("irrigation:mulch"), "{}", first.stdout);
    let folder = tmp.path().join("quorum-demo");
    assert!(folder.join(".quorum-report").exists());
    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(folder.join("results.json")).unwrap()).unwrap();
    assert_eq!(json["schema"], "quorum.results/1");
    assert_eq!(json["input"]["rows_used"], 57);
    let second = quorum(&["demo"], tmp.path(), None);
    assert_eq!(second.code, 0, "{}", second.stderr);
    if let Some(checker) = contract_checker() {
        let out = Command::new("python3").arg(checker).arg(folder.join("results.json")).output().unwrap();
        assert!(out.status.success(), "contract: {}", String::from_utf8_lossy(&out.stdout));
    }
}

#[test]
fn json_on_stdout_is_the_contract_object() {
    let tmp = tempfile::tempdir().unwrap();
    let data = repo_path("tests/data/warpbreaks.csv");
    let out = quorum(
        &["analyze", data.to_str().unwrap(), "-y", "breaks", "-f", "wool,tension", "--format", "json"],
        tmp.path(),
        None,
    );
    assert_eq!(out.code, 0, "{}", out.stderr);
    let v: serde_json::Value = serde_json::from_str(&out.stdout).unwrap();
    assert_eq!(v["design"]["factors"][1]["levels"], serde_json::json!(["H", "L", "M"]));
    assert_eq!(v["engines"][0]["engine"], "classical");
    assert_eq!(v["engines"][0]["terms"][2]["term"], "wool:tension");
    assert_eq!(v["reproducibility"]["seed"], 20240611);
    assert!(!out.stdout.contains("NaN"));
}

#[test]
fn standard_input_and_describe() {
    let tmp = tempfile::tempdir().unwrap();
    let text = "y,g,h\n1,a,x\n2,a,y\n3,b,x\n4,b,y\n5,a,x\n6,b,y\n";
    let out = quorum(&["describe", "-", "-y", "y", "-f", "g,h"], tmp.path(), Some(text));
    assert_eq!(out.code, 0, "{}", out.stderr);
    assert!(out.stdout.contains("<stdin>"));
    assert!(!out.stdout.contains("Classical ANOVA"));
}

#[test]
fn input_errors_exit_2_and_name_the_place() {
    let tmp = tempfile::tempdir().unwrap();
    let d = tmp.path();
    let cases: Vec<(String, Vec<&str>, &str)> = vec![
        (write(d, "comma.csv", "y;g\n1;a\n7,5;b\n2;a\n"), vec![], "--decimal-comma"),
        (write(d, "text.csv", "y,g\n1,a\nlots,b\n"), vec![], "line 3, column `y`"),
        (write(d, "inf.csv", "y,g\n1,a\ninf,b\n"), vec![], "line 3"),
        (write(d, "dup.csv", "y,g,g\n1,a,a\n"), vec![], "appears twice"),
        (write(d, "ragged.csv", "y,g\n1,a\n2,b,c\n"), vec![], "line 3"),
        (write(d, "spell.csv", "y,g\n1,a\n2,A\n3,a\n4,A\n"), vec![], "differ only"),
        (write(d, "one.csv", "y,g\n1,a\n2,a\n"), vec![], "only one level"),
        (write(d, "ok.csv", "y,g\n1,a\n2,b\n3,a\n"), vec!["--alpha", "2"], "--alpha"),
        ("missing-file.csv".to_string(), vec![], "missing-file.csv"),
    ];
    for (file, extra, needle) in cases {
        let mut args = vec!["analyze", file.as_str(), "-y", "y", "-f", "g"];
        args.extend(extra);
        let out = quorum(&args, d, None);
        assert_eq!(out.code, 2, "{file}: {}", out.stderr);
        assert!(out.stderr.contains(needle), "{file}: expected `{needle}` in: {}", out.stderr);
        assert!(!out.stderr.contains("panicked"));
    }
    let out = quorum(&["analyze", "ok.csv", "-y", "nope", "-f", "g"], d, None);
    assert_eq!(out.code, 2);
    assert!(out.stderr.contains("no outcome column `nope`"), "{}", out.stderr);
    let id = write(d, "ids.csv", "pid,y,g\n1,1,a\n2,2,b\n1,3,a\n");
    let out = quorum(&["analyze", &id, "-y", "y", "-f", "g", "--id", "pid"], d, None);
    assert_eq!(out.code, 2);
    assert!(out.stderr.contains("line 4") && out.stderr.contains("pseudo-replicated"), "{}", out.stderr);
}

#[test]
fn impossible_analyses_exit_3() {
    let tmp = tempfile::tempdir().unwrap();
    let d = tmp.path();
    let empty = write(d, "empty-cell.csv", "y,g,h\n1,a,x\n2,a,y\n3,b,x\n4,b,x\n");
    let out = quorum(&["analyze", &empty, "-y", "y", "-f", "g,h"], d, None);
    assert_eq!(out.code, 3, "{}", out.stderr);
    assert!(out.stderr.contains("g=b, h=y"), "{}", out.stderr);
    let constant = write(d, "constant.csv", "y,g\n5,a\n5,b\n5,a\n");
    let out = quorum(&["analyze", &constant, "-y", "y", "-f", "g"], d, None);
    assert_eq!(out.code, 3, "{}", out.stderr);
    assert!(out.stderr.contains("constant"));
}

#[test]
fn report_folders_of_the_user_are_never_touched() {
    let tmp = tempfile::tempdir().unwrap();
    let d = tmp.path();
    std::fs::create_dir(d.join("thesis")).unwrap();
    write(&d.join("thesis"), "chapter.txt", "precious");
    let data = write(d, "ok.csv", "y,g\n1,a\n2,b\n3,a\n4,b\n");
    let out = quorum(&["analyze", &data, "-y", "y", "-f", "g", "--report", "thesis"], d, None);
    assert_eq!(out.code, 2, "{}", out.stderr);
    assert_eq!(std::fs::read_to_string(d.join("thesis/chapter.txt")).unwrap(), "precious");
    assert_eq!(std::fs::read_dir(d.join("thesis")).unwrap().count(), 1);
    let out = quorum(&["analyze", &data, "-y", "y", "-f", "g", "--report", "fresh"], d, None);
    assert_eq!(out.code, 0, "{}", out.stderr);
    assert!(d.join("fresh/results.json").exists() && d.join("fresh/report.txt").exists());
}

#[test]
fn csv_export_and_report_tables() {
    // Contract: one row per engine and term; text guarded against spreadsheet formulas.
    let tmp = tempfile::tempdir().unwrap();
    let d = tmp.path();
    let data = write(d, "hostile.csv", "y,g\n1,=cmd\n2,+x\n3,=cmd\n4,+x\n5,=cmd\n");
    let out = quorum(&["analyze", &data, "-y", "y", "-f", "g", "--format", "csv", "--report", "rep"], d, None);
    assert_eq!(out.code, 0, "{}", out.stderr);
    let lines: Vec<&str> = out.stdout.lines().collect();
    assert!(lines[0].starts_with("engine,term,statistic,df1,df2,p,decision"), "{}", lines[0]);
    let engines = quorum::engines::ids().len();
    assert_eq!(lines.len(), 1 + engines, "{}", out.stdout);
    let cells = std::fs::read_to_string(d.join("rep/cells.csv")).unwrap();
    assert!(cells.contains("'=cmd") && cells.contains("'+x") && !cells.contains("\n=cmd"), "{cells}");
    for f in ["terms.csv", "marginal-means.csv", "verdicts.csv", "results.json", "report.txt"] {
        assert!(d.join("rep").join(f).exists(), "{f}");
    }
}

#[test]
fn completions_and_manual_page() {
    let tmp = tempfile::tempdir().unwrap();
    let bash = quorum(&["completions", "bash"], tmp.path(), None);
    assert_eq!(bash.code, 0);
    assert!(bash.stdout.contains("quorum") && bash.stdout.contains("analyze"));
    let man = quorum(&["manpage"], tmp.path(), None);
    assert_eq!(man.code, 0);
    assert!(
        man.stdout.contains(".TH") && man.stdout.contains("quorum"),
        "{}",
        &man.stdout[..200.min(man.stdout.len())]
    );
}
