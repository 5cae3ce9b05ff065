//! Shared helpers: reference fixtures and named tolerances (METHODS §0 and Overrides 3).
#![allow(dead_code)]

use serde_json::Value;
use std::path::PathBuf;

/// Statistics (SS, F, means): relative error ≤ 1e-9 (METHODS §0 "stat").
pub const STAT_REL: f64 = 1e-9;
/// Absolute floor for statistics that are near zero (METHODS §0 "stat").
pub const STAT_ABS: f64 = 1e-12;
/// p-values: relative error ≤ 1e-7 (METHODS Overrides 3).
pub const P_REL: f64 = 1e-7;
/// p-values: absolute floor 1e-300, so that a tiny p must still be right (Overrides 3).
pub const P_ABS: f64 = 1e-300;

/// Path of a file below the repository root.
pub fn repo_path(rel: &str) -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join(rel)
}

/// Reads `tests/reference/<topic>.json`, written by `tests/reference/generate.py`.
pub fn fixture(topic: &str) -> Value {
    let path = repo_path(&format!("tests/reference/{topic}.json"));
    let text = std::fs::read_to_string(&path).unwrap_or_else(|e| panic!("cannot read fixture {}: {e}", path.display()));
    serde_json::from_str(&text).unwrap_or_else(|e| panic!("bad fixture {}: {e}", path.display()))
}

/// A fixture number; the generator writes non-finite values as "nan", "inf", "-inf".
pub fn num(v: &Value) -> f64 {
    match v {
        Value::Number(n) => n.as_f64().expect("number"),
        Value::String(s) if s == "nan" => f64::NAN,
        Value::String(s) if s == "inf" => f64::INFINITY,
        Value::String(s) if s == "-inf" => f64::NEG_INFINITY,
        Value::Null => f64::NAN,
        other => panic!("not a number in fixture: {other}"),
    }
}

/// A list of fixture numbers.
pub fn nums(v: &Value) -> Vec<f64> {
    v.as_array().expect("array").iter().map(num).collect()
}

/// Asserts |actual − expected| ≤ abs + rel·|expected| and says what was compared.
#[track_caller]
pub fn assert_close(actual: f64, expected: f64, rel: f64, abs: f64, what: &str) {
    if expected.is_nan() {
        assert!(actual.is_nan(), "{what}: expected NaN, got {actual}");
        return;
    }
    if expected.is_infinite() {
        assert_eq!(actual, expected, "{what}");
        return;
    }
    let err = (actual - expected).abs();
    assert!(
        err <= abs + rel * expected.abs(),
        "{what}: got {actual:e}, expected {expected:e} (abs err {err:e}, rel err {:e}; allowed rel {rel:e}, abs {abs:e})",
        err / expected.abs()
    );
}

/// A statistic compared at the METHODS §0 "stat" tolerance.
#[track_caller]
pub fn assert_stat(actual: f64, expected: f64, what: &str) {
    assert_close(actual, expected, STAT_REL, STAT_ABS, what);
}

/// A p-value compared at the Overrides 3 tolerance.
#[track_caller]
pub fn assert_p(actual: f64, expected: f64, what: &str) {
    assert_close(actual, expected, P_REL, P_ABS, what);
}

/// A run configuration for a CSV under the repository, with default settings.
pub fn config_for(csv: &str, outcome: &str, factors: &[String]) -> quorum::config::Config {
    use quorum::config::*;
    Config {
        job: Job::Analyze,
        data: DataSpec { factors: factors.to_vec(), ..DataSpec::new(Source::File(repo_path(csv)), outcome, &[]) },
        settings: Settings { quiet: true, ..Settings::default() },
        output: OutputSpec { format: Format::Json, report_dir: None },
        command: "test".into(),
    }
}

/// The (csv, outcome, factors) of a dataset entry in a fixture.
pub fn dataset(entry: &Value) -> (String, String, Vec<String>) {
    let csv = entry["csv"].as_str().expect("csv").to_string();
    let outcome = entry["outcome"].as_str().expect("outcome").to_string();
    let factors =
        entry["factors"].as_array().expect("factors").iter().map(|f| f.as_str().unwrap().to_string()).collect();
    (csv, outcome, factors)
}

/// The datasets of a fixture (every key but `_meta`).
pub fn datasets(fix: &Value) -> Vec<(String, Value)> {
    fix.as_object()
        .expect("object")
        .iter()
        .filter(|(k, _)| !k.starts_with('_'))
        .map(|(k, v)| (k.clone(), v.clone()))
        .collect()
}
