//! The bad-input catalogue (tests/bad_inputs/cases.json): every case gives the exit code
//! DESIGN.md assigns ("Who stops what": 2 input/usage error, 3 analysis impossible, 0 for
//! awkward but valid files) with a message naming where and what to do; nothing panics;
//! a failing run leaves no partial output. Expected values are the documented contract.

use crate::support::repo_path;
use std::io::Write;
use std::path::Path;
use std::process::{Command, Stdio};

fn run(args: &[String], cwd: &Path, stdin: Option<Vec<u8>>) -> (i32, String) {
    let mut cmd = Command::new(env!("CARGO_BIN_EXE_quorum"));
    cmd.args(args).current_dir(cwd).stdout(Stdio::null()).stderr(Stdio::piped());
    cmd.stdin(if stdin.is_some() { Stdio::piped() } else { Stdio::null() });
    let mut child = cmd.spawn().expect("spawn quorum");
    if let Some(bytes) = stdin {
        let mut pipe = child.stdin.take().unwrap();
        // The child may stop reading early on an error; a broken pipe is fine then.
        let _ = pipe.write_all(&bytes);
    }
    let out = child.wait_with_output().unwrap();
    (out.status.code().unwrap_or(-1), String::from_utf8_lossy(&out.stderr).into_owned())
}

/// Generated inputs: (file bytes or stdin bytes, use stdin).
fn generated(name: &str) -> (Vec<u8>, bool) {
    match name {
        "many-levels.gen" => {
            let mut s = String::from("y,g,h\n");
            for i in 0..101 {
                s.push_str(&format!("{i},a{i},b{i}\n"));
            }
            (s.into_bytes(), false)
        }
        "huge-single-line.gen" => {
            let mut s = String::from("y,g\n1,a\n");
            s.push_str(&vec!["2"; 200_000].join(","));
            s.push('\n');
            (s.into_bytes(), false)
        }
        "large-stdin.gen" => {
            let mut s = String::from("y,g\n");
            for i in 0..200_000u64 {
                s.push_str(&format!("{}.{},{}\n", i % 97, i % 10, ["a", "b", "c"][(i % 3) as usize]));
            }
            (s.into_bytes(), true)
        }
        other => panic!("no generator for {other}"),
    }
}

#[test]
fn every_catalogued_input_gets_its_documented_exit_code_and_message() {
    let dir = repo_path("tests/bad_inputs");
    let cases: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("cases.json")).unwrap()).unwrap();
    let cases = cases.as_array().unwrap();
    assert!(cases.len() >= 40, "the catalogue has {} cases; the hardening issue asks for at least 40", cases.len());
    for case in cases {
        let tmp = tempfile::tempdir().unwrap();
        let note = case["note"].as_str().unwrap_or("");
        let (name, stdin) = match case["file"].as_str() {
            Some(f) => {
                std::fs::copy(dir.join(f), tmp.path().join(f)).unwrap();
                (f.to_string(), None)
            }
            None => {
                let name = cases_gen_name(case);
                let (bytes, use_stdin) = generated(&name);
                if use_stdin {
                    ("-".to_string(), Some(bytes))
                } else {
                    std::fs::write(tmp.path().join(&name), bytes).unwrap();
                    (name, None)
                }
            }
        };
        let mut args = vec!["analyze".to_string(), name.clone()];
        args.extend(case["args"].as_array().unwrap().iter().map(|a| a.as_str().unwrap().to_string()));
        args.extend([
            "--report".to_string(),
            "out".to_string(),
            "--permutations".into(),
            "199".into(),
            "--resamples".into(),
            "199".into(),
        ]);
        let (code, stderr) = run(&args, tmp.path(), stdin);
        let want = case["exit"].as_i64().unwrap() as i32;
        assert!(!stderr.contains("panicked"), "{name}: panic: {stderr}");
        assert_eq!(code, want, "{name} ({note}): exit code; stderr: {stderr}");
        let fragment = case["message"].as_str().unwrap();
        assert!(stderr.contains(fragment), "{name}: expected `{fragment}` in: {stderr}");
        if want != 0 {
            assert!(!tmp.path().join("out").exists(), "{name}: a failing run left a report folder");
            assert!(stderr.starts_with("error: "), "{name}: {stderr}");
        } else {
            assert!(tmp.path().join("out/results.json").exists(), "{name}: no results written");
        }
    }
}

/// The name of a generated case (its `file` is null; the generator key is in `gen`).
fn cases_gen_name(case: &serde_json::Value) -> String {
    case["gen"].as_str().expect("generated cases name their generator").to_string()
}
