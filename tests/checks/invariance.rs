//! Invariances that hold (DESIGN.md "Invariances that hold"), checked on every engine in
//! the registry: row order (same canonical observation order), adding a constant,
//! positive scaling, relabelling levels with --levels fixed to the matching order,
//! swapping factor order, and — for the rank ATS only — strictly increasing transforms.
//! Property tests: the expected value is the untransformed analysis itself. Engines that
//! resample are compared within Monte Carlo error (4·√(SE₁² + SE₂²), METHODS Overrides 3)
//! where the transformation changes floating-point rounding or the canonical order.

use crate::support::*;
use quorum::config::*;
use quorum::results::{Analysis, TermResult};

/// Resamples per engine: enough for Monte Carlo comparisons, quick in CI.
const B: u64 = 999;

struct Data {
    header: Vec<String>,
    rows: Vec<Vec<String>>,
}

fn read_csv(rel: &str) -> Data {
    let text = std::fs::read_to_string(repo_path(rel)).unwrap();
    let mut lines = text.lines();
    let header = lines.next().unwrap().split(',').map(String::from).collect();
    let rows = lines.filter(|l| !l.is_empty()).map(|l| l.split(',').map(String::from).collect()).collect();
    Data { header, rows }
}

fn analyse(data: &Data, outcome: &str, factors: &[&str], levels: Vec<(String, Vec<String>)>) -> Analysis {
    let tmp = tempfile::tempdir().unwrap();
    let path = tmp.path().join("data.csv");
    let mut text = data.header.join(",") + "\n";
    for r in &data.rows {
        text.push_str(&(r.join(",") + "\n"));
    }
    std::fs::write(&path, text).unwrap();
    let mut spec = DataSpec::new(Source::File(path), outcome, factors);
    spec.levels = levels;
    let config = Config {
        job: Job::Analyze,
        data: spec,
        settings: Settings { permutations: B, resamples: B, max_permutations: B, quiet: true, ..Settings::default() },
        output: OutputSpec { format: Format::Json, report_dir: None },
        command: "invariance".into(),
    };
    quorum::analysis::run(&config).unwrap()
}

fn col(d: &Data, name: &str) -> usize {
    d.header.iter().position(|h| h == name).unwrap()
}

fn map_outcome(d: &Data, outcome: &str, f: impl Fn(f64) -> f64) -> Data {
    let c = col(d, outcome);
    let rows = d
        .rows
        .iter()
        .map(|r| {
            let mut r = r.clone();
            r[c] = format!("{}", f(r[c].parse::<f64>().unwrap()));
            r
        })
        .collect();
    Data { header: d.header.clone(), rows }
}

/// Term results of `engine` keyed by the set of factors in the term (order-free).
fn term<'a>(a: &'a Analysis, engine: &str, factors: &[&str]) -> &'a TermResult {
    let e = a.engines.iter().find(|e| e.engine == engine).unwrap();
    e.terms
        .iter()
        .find(|t| {
            let parts: Vec<&str> = t.term.split(':').collect();
            parts.len() == factors.len() && factors.iter().all(|f| parts.contains(f))
        })
        .unwrap_or_else(|| panic!("{engine}: no term {factors:?}"))
}

/// Compares every engine and term of two analyses. `exact_resampling`: the canonical
/// order and the arithmetic are unchanged, so resampling engines must agree exactly too.
fn compare(base: &Analysis, other: &Analysis, terms: &[Vec<&str>], exact_resampling: bool, what: &str) {
    for e in &base.engines {
        for factors in terms {
            let (x, y) = (term(base, &e.engine, factors), term(other, &e.engine, factors));
            let here = format!("{what}: {} {factors:?}", e.engine);
            assert_eq!(x.not_applicable.is_some(), y.not_applicable.is_some(), "{here}: applicability");
            let (Some(px), Some(py)) = (x.p, y.p) else { continue };
            match (&x.mc, &y.mc) {
                (Some(mx), Some(my)) if !exact_resampling && !mx.exact => {
                    // Monte Carlo comparison (Overrides 3), with the Clopper–Pearson bound
                    // standing in for a zero SE.
                    let se = |m: &quorum::results::MonteCarlo| if m.se > 0.0 { m.se } else { m.ci_high - m.ci_low };
                    let tol = 4.0 * (se(mx).powi(2) + se(my).powi(2)).sqrt();
                    assert!((px - py).abs() <= tol, "{here}: p {px} vs {py} (tolerance {tol})");
                }
                _ => {
                    assert_close(py, px, P_REL, P_ABS, &format!("{here}: p"));
                    if let (Some(sx), Some(sy)) = (x.statistic, y.statistic) {
                        assert_close(sy, sx, STAT_REL, STAT_ABS, &format!("{here}: statistic"));
                    }
                }
            }
        }
    }
}

fn all_terms<'a>(factors: &[&'a str]) -> Vec<Vec<&'a str>> {
    let k = factors.len();
    (1u32..(1 << k)).map(|m| (0..k).filter(|&f| m & (1 << f) != 0).map(|f| factors[f]).collect()).collect()
}

#[test]
fn row_order_with_the_same_canonical_order_changes_nothing() {
    let d = read_csv("tests/data/methods12.csv");
    let base = analyse(&d, "y", &["A", "B"], vec![]);
    // Reverse the order of the cells' blocks while keeping the order within each cell.
    let (a, b) = (col(&d, "A"), col(&d, "B"));
    let mut rows = d.rows.clone();
    rows.sort_by(|r, s| (&s[b], &s[a]).cmp(&(&r[b], &r[a])));
    let shuffled = Data { header: d.header.clone(), rows };
    compare(&base, &analyse(&shuffled, "y", &["A", "B"], vec![]), &all_terms(&["A", "B"]), true, "row order");
}

#[test]
fn shift_and_positive_scale_change_nothing() {
    for (csv, factors) in
        [("tests/data/methods12.csv", vec!["A", "B"]), ("tests/data/threeway.csv", vec!["A", "B", "C"])]
    {
        let d = read_csv(csv);
        let base = analyse(&d, "y", &factors, vec![]);
        let terms = all_terms(&factors);
        compare(&base, &analyse(&map_outcome(&d, "y", |v| v + 1000.0), "y", &factors, vec![]), &terms, false, "shift");
        compare(&base, &analyse(&map_outcome(&d, "y", |v| v * 3.7), "y", &factors, vec![]), &terms, false, "scale");
    }
}

#[test]
fn relabelled_levels_in_matching_order_change_nothing() {
    let d = read_csv("tests/data/methods12.csv");
    let base = analyse(&d, "y", &["A", "B"], vec![]);
    let (a, b) = (col(&d, "A"), col(&d, "B"));
    let rename = |s: &str| match s {
        "a1" => "zeta",
        "a2" => "alpha",
        "b1" => "Q",
        "b2" => "m",
        "b3" => "3",
        other => panic!("{other}"),
    };
    let rows = d
        .rows
        .iter()
        .map(|r| {
            let mut r = r.clone();
            r[a] = rename(&r[a]).into();
            r[b] = rename(&r[b]).into();
            r
        })
        .collect();
    let relabelled = Data { header: d.header.clone(), rows };
    let levels = vec![
        ("A".to_string(), vec!["zeta".to_string(), "alpha".to_string()]),
        ("B".to_string(), vec!["Q".to_string(), "m".to_string(), "3".to_string()]),
    ];
    compare(&base, &analyse(&relabelled, "y", &["A", "B"], levels), &all_terms(&["A", "B"]), true, "relabel");
}

#[test]
fn swapping_factor_order_changes_nothing_but_resampling_error() {
    let d = read_csv("tests/data/threeway.csv");
    let base = analyse(&d, "y", &["A", "B", "C"], vec![]);
    let swapped = analyse(&d, "y", &["C", "A", "B"], vec![]);
    compare(&base, &swapped, &all_terms(&["A", "B", "C"]), false, "factor order");
}

#[test]
fn increasing_transforms_leave_the_rank_ats_unchanged_but_not_art() {
    // DESIGN.md / METHODS Overrides 6: the rank ATS is invariant, ART is not (it aligns
    // on the raw scale) — the second half documents that ART moves.
    let d = read_csv("tests/data/methods12.csv");
    let base = analyse(&d, "y", &["A", "B"], vec![]);
    let logged = analyse(&map_outcome(&d, "y", f64::ln), "y", &["A", "B"], vec![]);
    for factors in all_terms(&["A", "B"]) {
        let (x, y) = (term(&base, "rank-ats", &factors), term(&logged, "rank-ats", &factors));
        assert_eq!(x.statistic, y.statistic, "rank-ats {factors:?}");
        assert_eq!(x.p, y.p, "rank-ats {factors:?}");
    }
    let moved =
        all_terms(&["A", "B"]).iter().any(|f| term(&base, "art", f).statistic != term(&logged, "art", f).statistic);
    assert!(moved, "ART is expected to change under a log transform");
}
