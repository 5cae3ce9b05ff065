//! The sensitivity variant of `analyze` end to end: which rows each drop rule removes,
//! that the variant equals an analysis of the file without those rows (the reference is
//! quorum's own classical engine on a filtered copy, itself checked against statsmodels
//! in `classical.rs`), that it is labelled descriptive, that it never touches the input,
//! and that degenerate variants give `not_applicable` rather than an exit.

use crate::support::*;
use quorum::config::{DropRule, Job};
use quorum::report::{text::Text, to_string};
use std::process::Command;

fn factors() -> Vec<String> {
    vec!["A".to_string(), "B".to_string()]
}

#[test]
fn far_variant_equals_the_analysis_without_the_far_out_rows() {
    let path = repo_path("tests/data/methods12.csv");
    let before = std::fs::read(&path).unwrap();
    let a = quorum::analysis::run(&config_for("tests/data/methods12.csv", "y", &factors())).unwrap();
    assert_eq!(std::fs::read(&path).unwrap(), before, "the input file must not change");
    assert_eq!(a.sensitivity.len(), 1);
    let s = &a.sensitivity[0];
    assert_eq!((s.variant.as_str(), s.rule.as_str()), ("without-far-out-points", "far"));
    // METHODS §12.1: 13.8 in a2b1 is the only far-out point; it is on line 20.
    assert_eq!(s.rows_removed, vec![20]);
    assert!(s.notes.iter().any(|n| n.starts_with("descriptive")));
    assert!(s.engines.iter().all(|e| e.notes.iter().any(|n| n.contains("descriptive"))));
    assert_eq!(s.concordance.len(), 3);
    let rate = s.null_removal_rate.unwrap();
    assert!(rate > 0.0 && rate < 1.0);

    // The same analysis on a copy of the file without line 20.
    let text = String::from_utf8(before).unwrap();
    let kept: Vec<&str> = text.lines().enumerate().filter(|(i, _)| i + 1 != 20).map(|(_, l)| l).collect();
    let tmp = tempfile::tempdir().unwrap();
    let filtered = tmp.path().join("without-line-20.csv");
    std::fs::write(&filtered, kept.join("\n") + "\n").unwrap();
    let mut config = config_for("tests/data/methods12.csv", "y", &factors());
    config.data.source = quorum::config::Source::File(filtered);
    config.settings.drop_rule = DropRule::None;
    let direct = quorum::analysis::run(&config).unwrap();
    assert!(direct.sensitivity.is_empty());
    let classical = |engines: &[quorum::results::EngineResult]| {
        engines.iter().find(|e| e.engine == "classical").unwrap().terms.clone()
    };
    for (v, d) in classical(&s.engines).iter().zip(classical(&direct.engines)) {
        assert_stat(v.statistic.unwrap(), d.statistic.unwrap(), &format!("variant F {}", v.term));
        assert_p(v.p.unwrap(), d.p.unwrap(), &format!("variant p {}", v.term));
    }
}

#[test]
fn mad_rule_and_no_variant() {
    let mut config = config_for("tests/data/methods12.csv", "y", &factors());
    config.settings.drop_rule = DropRule::Mad;
    let a = quorum::analysis::run(&config).unwrap();
    let s = &a.sensitivity[0];
    assert_eq!(s.rule, "mad");
    assert!(s.description.contains("K(n)"), "{}", s.description);
    // The calibrated rule removes at most the gross outlier (|13.8 − 9.85|/0.37 = 10.7 MADN).
    assert!(s.rows_removed.iter().all(|&l| l == 20), "{:?}", s.rows_removed);
    assert!(s.null_removal_rate.unwrap() <= 0.05 + 1e-12);
    config.settings.drop_rule = DropRule::None;
    assert!(quorum::analysis::run(&config).unwrap().sensitivity.is_empty());
    config.settings.drop_rule = DropRule::Far;
    config.job = Job::Describe;
    assert!(quorum::analysis::run(&config).unwrap().sensitivity.is_empty(), "describe has no variant");
}

#[test]
fn text_report_shows_diagnostics_flags_and_the_variant() {
    let a = quorum::analysis::run(&config_for("tests/data/methods12.csv", "y", &factors())).unwrap();
    let text = to_string(&Text, &a);
    for want in [
        "Shape, normality and outlying points by cell",
        "Levene (mean-centred): F(5, 33) = 3.597",
        "Calibrated checks",
        "[unequal-variances]",
        "Outlying points",
        "Sensitivity variant `without-far-out-points`",
        "removed 1 row(s): line 20",
        "note: descriptive",
    ] {
        assert!(text.contains(want), "missing `{want}` in\n{text}");
    }
    assert!(!text.contains("NaN"));
}

/// Invented data (property test): every cell is constant apart from one far-out point,
/// so the variant has zero residual variance (classical F not applicable), and with a
/// common constant the variant's outcome is constant (every engine not applicable).
#[test]
fn degenerate_variants_are_not_applicable_not_an_exit() {
    let tmp = tempfile::tempdir().unwrap();
    let write = |name: &str, cells: [[f64; 5]; 4]| {
        let mut s = String::from("y,A,B\n");
        for (c, vals) in cells.iter().enumerate() {
            for v in vals {
                s.push_str(&format!("{v},a{},b{}\n", c / 2 + 1, c % 2 + 1));
            }
        }
        let p = tmp.path().join(name);
        std::fs::write(&p, s).unwrap();
        p
    };
    let run = |p: std::path::PathBuf| {
        let mut config = config_for("tests/data/methods12.csv", "y", &factors());
        config.data.source = quorum::config::Source::File(p);
        quorum::analysis::run(&config).unwrap()
    };
    let zero_sse = write(
        "zero-sse.csv",
        [[1.0, 1.0, 1.0, 1.0, 40.0], [2.0, 2.0, 2.0, 2.0, 60.0], [3.0, 3.0, 3.0, 3.0, -50.0], [4.0; 5]],
    );
    let a = run(zero_sse);
    let s = &a.sensitivity[0];
    assert_eq!(s.rows_removed.len(), 3);
    let classical = s.engines.iter().find(|e| e.engine == "classical").unwrap();
    for t in &classical.terms {
        assert!(t.not_applicable.as_deref().unwrap_or("").contains("zero residual variance"), "{t:?}");
    }
    let constant = write(
        "constant.csv",
        [
            [5.0, 5.0, 5.0, 5.0, 40.0],
            [5.0, 5.0, 5.0, 5.0, 60.0],
            [5.0, 5.0, 5.0, 5.0, -50.0],
            [5.0, 5.0, 5.0, 5.0, 90.0],
        ],
    );
    let a = run(constant);
    let s = &a.sensitivity[0];
    assert_eq!(s.rows_removed.len(), 4);
    for e in &s.engines {
        for t in &e.terms {
            assert!(t.not_applicable.as_deref().unwrap_or("").contains("constant"), "{t:?}");
        }
    }
    assert!(a.diagnostics.flags.iter().any(|f| f.code == "mad-zero"));
    serde_json::to_string(&a).unwrap();
}

#[test]
fn drop_rule_flag_on_the_command_line() {
    let bin = env!("CARGO_BIN_EXE_quorum");
    let csv = repo_path("tests/data/methods12.csv");
    let out = Command::new(bin)
        .args(["analyze", csv.to_str().unwrap(), "-y", "y", "-f", "A,B", "--drop-rule", "mad", "--format", "json"])
        .output()
        .unwrap();
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["sensitivity"][0]["rule"], "mad");
    assert!(v["diagnostics"]["flags"].as_array().unwrap().iter().all(|f| f["code"].is_string()));
    let bad = Command::new(bin)
        .args(["analyze", csv.to_str().unwrap(), "-y", "y", "-f", "A,B", "--drop-rule", "sometimes"])
        .output()
        .unwrap();
    assert_eq!(bad.status.code(), Some(2));
}
