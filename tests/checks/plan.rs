//! `quorum plan` and `quorum merge`: simulated power and type-I error.
//!
//! Sources: `tests/reference/plan.json` (scipy `ncf.sf` power of the classical F with an
//! independent numpy noncentrality; scipy quantiles of the error families; scipy
//! `binomtest(...).proportion_ci(method='exact')`), the nominal level α of the classical F
//! under normal equal-variance errors (a theorem, not a library value), and the
//! contract that one run equals the merge of its shards and does not depend on threads.

use crate::support::{assert_stat, fixture, num, repo_path};
use quorum::config::{DataSpec, Format, OutputSpec, Settings, Source};
use quorum::plan::draws::ErrorFamily;
use quorum::plan::result::{clopper_pearson, PlanReport};
use quorum::plan::scenario::{self, DesignedSpec, MeanSpec, RateKind};
use quorum::plan::{self, PlanConfig, PlanSource, Shard, Sizes};
use quorum::resample::{Purpose, Stream, StreamKey};
use serde_json::Value;
use std::path::Path;
use std::process::Command;

/// Monte Carlo comparisons use 4 standard errors (METHODS Overrides 3).
const MC_SE_MULTIPLE: f64 = 4.0;
/// scipy's exact binomial interval is found by its own root-finding, which agrees with
/// the beta quantile to about 1e-11 (the same reason as `resample::mc`'s test), so 1e-9.
const CP_REL: f64 = 1e-9;

fn designed(shape: &[usize], means: MeanSpec, errors: ErrorFamily, sd: Option<Vec<f64>>) -> PlanSource {
    PlanSource::Designed(DesignedSpec { shape: shape.to_vec(), means, errors, sd_ratio: sd })
}

fn config(source: PlanSource, sizes: Sizes, sims: u64, settings: Settings) -> PlanConfig {
    PlanConfig {
        source,
        sizes,
        sims,
        settings: Settings { quiet: true, ..settings },
        shard: None,
        max_time: None,
        output: OutputSpec { format: Format::Json, report_dir: None },
        command: "test".into(),
    }
}

fn engines(ids: &[&str]) -> Settings {
    Settings { engines: ids.iter().map(|s| s.to_string()).collect(), ..Settings::default() }
}

/// The JSON of a report without its reproducibility block.
fn numbers(r: &PlanReport) -> Value {
    let mut v: Value = serde_json::from_str(&plan::to_json(r)).unwrap();
    v.as_object_mut().unwrap().remove("reproducibility");
    v
}

fn rate<'a>(
    r: &'a PlanReport,
    condition: &str,
    grid: usize,
    engine: &str,
    term: &str,
) -> &'a quorum::plan::result::RateRow {
    r.rates
        .iter()
        .find(|x| x.condition == condition && x.grid == grid && x.engine == engine && x.term == term)
        .unwrap_or_else(|| panic!("no rate for {condition} {grid} {engine} {term}"))
}

#[test]
fn classical_power_matches_the_noncentral_f() {
    power_against_noncentral_f(3000);
}

/// The same with 40 000 simulations per case, printing each comparison:
/// `cargo test --test checks plan::classical_power_large -- --ignored --nocapture`.
#[test]
#[ignore]
fn classical_power_large() {
    power_against_noncentral_f(40_000);
}

fn power_against_noncentral_f(sims: u64) {
    // Source: scipy `ncf.sf(f.isf(α, df1, df2), df1, df2, λ)` with λ from an independent
    // numpy computation (Helmert contrasts), tests/reference/gen/plan.py.
    let fx = fixture("plan");
    for case in fx["power"].as_array().unwrap() {
        let label = case["label"].as_str().unwrap();
        let shape: Vec<usize> =
            case["shape"].as_array().unwrap().iter().map(|v| v.as_u64().unwrap() as usize).collect();
        let n: Vec<usize> = case["n"].as_array().unwrap().iter().map(|v| v.as_u64().unwrap() as usize).collect();
        let alpha = num(&case["alpha"]);
        let means = match case["means"].as_array() {
            Some(m) => MeanSpec::Means(m.iter().map(num).collect()),
            None => MeanSpec::Effects(
                case["effects"].as_object().unwrap().iter().map(|(k, v)| (k.clone(), num(v))).collect(),
            ),
        };
        let settings = Settings { alpha, ..engines(&["classical"]) };
        let r =
            plan::run(&config(designed(&shape, means, ErrorFamily::Normal, None), Sizes::PerCell(n), sims, settings))
                .unwrap();
        for t in case["terms"].as_array().unwrap() {
            let term = t["term"].as_str().unwrap();
            let lambda = num(&t["lambda"]);
            let want = num(&t["power"]);
            let row = rate(&r, "effects", 0, "classical", term);
            let got = row.rate.unwrap();
            let se = (want * (1.0 - want) / sims as f64).sqrt();
            println!("{label}, {term}: simulated {got:.4}, noncentral F {want:.4}, SE {se:.4}");
            assert!(
                (got - want).abs() <= MC_SE_MULTIPLE * se,
                "{label}, {term}: simulated {got}, noncentral F {want} (SE {se})"
            );
            let expected_kind = if lambda > 1e-12 { RateKind::Power } else { RateKind::TypeIError };
            assert_eq!(row.kind, expected_kind, "{label}, {term}");
            if lambda > 1e-12 {
                let nc = r.spec.noncentrality.iter().find(|x| x.term == term).unwrap();
                assert_stat(nc.lambda, lambda, &format!("{label}, {term}: λ"));
            }
        }
    }
}

#[test]
fn classical_type_i_error_is_nominal_under_normal_equal_variances() {
    // Source: under normal errors with equal variances the F test has exactly level α
    // (Fisher's F distribution), so 4000 simulations must land in [0.04, 0.06] (issue 12).
    let r = plan::run(&config(
        designed(&[3, 2], MeanSpec::Zero, ErrorFamily::Normal, None),
        Sizes::Equal(vec![10]),
        4000,
        engines(&["classical"]),
    ))
    .unwrap();
    for term in ["A", "B", "A:B"] {
        let row = rate(&r, "null", 0, "classical", term);
        assert_eq!(row.kind, RateKind::TypeIError);
        let p = row.rate.unwrap();
        assert!((0.04..=0.06).contains(&p), "{term}: {p}");
        assert_eq!(row.runs, 4000);
    }
}

#[test]
fn error_families_match_scipy_quantiles() {
    // Source: scipy ppf of each family, standardised with its mean and SD (plan.py).
    let fx = fixture("plan");
    let n = 200_000usize;
    for f in fx["families"].as_array().unwrap() {
        let errors = scenario::parse_errors(f["errors"].as_str().unwrap()).unwrap();
        let mut s = errors.sampler(Stream::new(7, StreamKey { purpose: Purpose::Plan, term: 0, chunk: 0, aux: 1 }));
        let x: Vec<f64> = (0..n).map(|_| s.error()).collect();
        for (p, q) in f["probs"].as_array().unwrap().iter().zip(f["quantiles"].as_array().unwrap()) {
            let (p, q) = (num(p), num(q));
            let below = x.iter().filter(|&&v| v <= q).count() as f64 / n as f64;
            let se = (p * (1.0 - p) / n as f64).sqrt();
            assert!((below - p).abs() <= MC_SE_MULTIPLE * se, "{}: P(X ≤ {q}) = {below}, want {p}", f["errors"]);
        }
        if let ErrorFamily::SkewNormal { shape } = errors {
            assert_stat(quorum::plan::draws::skew_normal_skewness(shape), num(&f["skewness"]), "skew-normal skewness");
        }
    }
}

#[test]
fn clopper_pearson_matches_scipy() {
    // Source: scipy `binomtest(x, n).proportion_ci(0.95, 'exact')` (plan.py).
    for c in fixture("plan")["clopper_pearson"].as_array().unwrap() {
        let (x, n) = (c["x"].as_u64().unwrap(), c["n"].as_u64().unwrap());
        let (lo, hi) = clopper_pearson(x, n, 0.95);
        let want_lo = num(&c["low"]);
        assert!((lo - want_lo).abs() <= CP_REL * want_lo, "{x}/{n}: low {lo} vs {want_lo}");
        assert!((hi / num(&c["high"]) - 1.0).abs() <= CP_REL, "{x}/{n}: high {hi}");
    }
}

/// A plan that exercises every registry engine, nested resampling (`trimmed` with its
/// bootstrap reference), a grid and two conditions.
fn busy_config(sims: u64) -> PlanConfig {
    let settings = Settings {
        permutations: 199,
        resamples: 199,
        wj_reference: quorum::config::WjReference::Bootstrap,
        ..Settings::default()
    };
    config(
        designed(
            &[2, 3],
            MeanSpec::Effects(vec![("A".into(), 0.4), ("A:B".into(), 0.2)]),
            ErrorFamily::SkewNormal { shape: 4.0 },
            Some(vec![1.0, 1.0, 2.0, 1.0, 1.0, 2.0]),
        ),
        Sizes::Equal(vec![6, 9]),
        sims,
        settings,
    )
}

#[test]
fn results_do_not_depend_on_the_thread_count() {
    let mut cfg = busy_config(40);
    let mut outs = Vec::new();
    for threads in [1, 2, 8] {
        cfg.settings.threads = Some(threads);
        outs.push(numbers(&plan::run(&cfg).unwrap()));
    }
    assert_eq!(outs[0], outs[1]);
    assert_eq!(outs[0], outs[2]);
}

#[test]
fn one_run_equals_the_merge_of_four_shards() {
    let tmp = tempfile::tempdir().unwrap();
    let cfg = busy_config(50);
    let whole = plan::run(&cfg).unwrap();
    let mut files = Vec::new();
    for k in [3, 1, 4, 2] {
        let mut part = cfg.clone();
        part.shard = Some(Shard { index: k, count: 4 });
        let r = plan::run(&part).unwrap();
        assert!(r.simulations.completed < 50);
        let path = tmp.path().join(format!("part-{k}.json"));
        std::fs::write(&path, plan::to_json(&r)).unwrap();
        files.push(path);
    }
    let merged = plan::merge_files(&plan::MergeConfig {
        files: files.clone(),
        output: OutputSpec { format: Format::Json, report_dir: None },
        command: "merge".into(),
    })
    .unwrap();
    assert_eq!(numbers(&merged), numbers(&whole));
    assert_eq!(merged.simulations.ranges, vec![[0, 50]]);
    // A part merged twice counts simulations twice: refused.
    let twice = plan::merge_files(&plan::MergeConfig {
        files: vec![files[0].clone(), files[0].clone()],
        output: OutputSpec { format: Format::Json, report_dir: None },
        command: "merge".into(),
    });
    assert_eq!(twice.unwrap_err().exit_code(), 2);
}

#[test]
fn merge_refuses_parts_of_different_plans() {
    let tmp = tempfile::tempdir().unwrap();
    let mut a = config(
        designed(&[2, 2], MeanSpec::Zero, ErrorFamily::Normal, None),
        Sizes::Equal(vec![5]),
        20,
        engines(&["classical"]),
    );
    a.shard = Some(Shard { index: 1, count: 2 });
    let mut b = a.clone();
    b.shard = Some(Shard { index: 2, count: 2 });
    b.settings.seed = 7;
    let pa = tmp.path().join("a.json");
    let pb = tmp.path().join("b.json");
    std::fs::write(&pa, plan::to_json(&plan::run(&a).unwrap())).unwrap();
    std::fs::write(&pb, plan::to_json(&plan::run(&b).unwrap())).unwrap();
    let e = plan::merge_files(&plan::MergeConfig {
        files: vec![pa, pb],
        output: OutputSpec { format: Format::Json, report_dir: None },
        command: "merge".into(),
    })
    .unwrap_err();
    assert_eq!(e.exit_code(), 2);
    assert!(e.to_string().contains("spec.seed"), "{e}");
}

#[test]
fn max_time_stops_at_a_checkpoint_and_says_so() {
    let mut cfg = config(
        designed(&[2, 2], MeanSpec::Zero, ErrorFamily::Normal, None),
        Sizes::Equal(vec![5]),
        1000,
        engines(&["classical"]),
    );
    cfg.max_time = Some(1e-9);
    let r = plan::run(&cfg).unwrap();
    assert_eq!(r.simulations.completed, quorum::plan::simulate::PLAN_BLOCK);
    assert!(r.reproducibility.stopped_at_time_limit);
    assert!(r.notes[0].starts_with("incomplete: 32 of 1000"), "{:?}", r.notes);
    let row = rate(&r, "null", 0, "classical", "A");
    assert_eq!(row.runs, 32);
    // The simulations that ran give the counts a run of just those simulations gives.
    let mut first = cfg.clone();
    first.max_time = None;
    first.sims = 32;
    let short = plan::run(&first).unwrap();
    let counts = |r: &PlanReport| r.rates.iter().map(|x| (x.runs, x.rejections)).collect::<Vec<_>>();
    assert_eq!(counts(&short), counts(&r));
}

#[test]
fn discretised_outcomes_keep_only_exact_nulls_as_type_i_error() {
    let r = plan::run(&config(
        designed(
            &[2, 2],
            MeanSpec::Effects(vec![("A".into(), 0.5), ("B".into(), 0.5)]),
            ErrorFamily::Likert { items: 3 },
            None,
        ),
        Sizes::Equal(vec![8]),
        30,
        engines(&["classical", "rank-ats"]),
    ))
    .unwrap();
    // Both factors active: the latent additive model is not additive on the 1–7 scale.
    let ab = rate(&r, "effects", 0, "classical", "A:B");
    assert_eq!(ab.kind, RateKind::RejectionRate);
    assert!(ab.null_note.as_deref().unwrap().contains("latent"));
    // Under the null condition every factor is inactive: every null exact.
    for term in ["A", "B", "A:B"] {
        assert_eq!(rate(&r, "null", 0, "rank-ats", term).kind, RateKind::TypeIError);
    }
    let only_a = plan::run(&config(
        designed(&[2, 2], MeanSpec::Effects(vec![("A".into(), 0.5)]), ErrorFamily::Likert { items: 3 }, None),
        Sizes::Equal(vec![8]),
        30,
        engines(&["classical"]),
    ))
    .unwrap();
    assert_eq!(rate(&only_a, "effects", 0, "classical", "A:B").kind, RateKind::TypeIError);
    assert_eq!(rate(&only_a, "effects", 0, "classical", "B").kind, RateKind::TypeIError);
    assert_eq!(rate(&only_a, "effects", 0, "classical", "A").kind, RateKind::Power);
}

#[test]
fn like_mode_judges_each_engine_under_its_own_null() {
    let spec = DataSpec::new(Source::File(repo_path("tests/data/toothgrowth.csv")), "len", &["supp", "dose"]);
    let settings = Settings { permutations: 199, resamples: 199, ..Settings::default() };
    let r = plan::run(&config(PlanSource::Like(spec), Sizes::Data, 400, settings)).unwrap();
    assert_eq!(r.spec.mode, "like");
    assert_eq!(r.spec.grid[0].n, vec![10; 6]);
    let ids: Vec<&str> = r.spec.conditions.iter().map(|c| c.id.as_str()).collect();
    assert_eq!(ids, vec!["equal-means", "equal-trimmed-means"]);
    let classical = rate(&r, "equal-means", 0, "classical", "supp:dose");
    assert_eq!(classical.kind, RateKind::TypeIError);
    assert!(classical.bradley.is_some());
    assert_eq!(rate(&r, "equal-trimmed-means", 0, "trimmed", "dose").kind, RateKind::TypeIError);
    assert_eq!(rate(&r, "equal-means", 0, "rank-ats", "dose").kind, RateKind::RejectionRate);
    assert!(r.notes.iter().any(|n| n.contains("rejection rate with equal means")), "{:?}", r.notes);
    // Balanced cells with moderate variance ratios: the classical F keeps its level
    // (every term's rate inside Bradley's band; measured 0.04–0.06).
    for term in ["supp", "dose", "supp:dose"] {
        let p = rate(&r, "equal-means", 0, "classical", term).rate.unwrap();
        assert!((0.025..=0.075).contains(&p), "{term}: {p}");
    }
}

fn quorum(args: &[&str], cwd: &Path) -> (i32, String, String) {
    let out = Command::new(env!("CARGO_BIN_EXE_quorum")).args(args).current_dir(cwd).output().unwrap();
    (
        out.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

fn without_repro(text: &str) -> Value {
    let mut v: Value = serde_json::from_str(text).unwrap();
    v.as_object_mut().unwrap().remove("reproducibility");
    v
}

#[test]
fn command_line_shards_merge_to_the_single_run() {
    let tmp = tempfile::tempdir().unwrap();
    let base =
        ["plan", "--design", "2x2", "--n-grid", "5,8", "--effect", "A=0.5", "--sims", "37", "--permutations", "99"];
    let (code, single, err) = quorum(&[&base[..], &["--format", "json"]].concat(), tmp.path());
    assert_eq!(code, 0, "{err}");
    let mut names = Vec::new();
    for k in 1..=4 {
        let shard = format!("{k}/4");
        let (code, part, err) = quorum(&[&base[..], &["--shard", &shard, "--quiet"]].concat(), tmp.path());
        assert_eq!(code, 0, "{err}");
        let name = format!("part-{k}.json");
        std::fs::write(tmp.path().join(&name), part).unwrap();
        names.push(name);
    }
    let mut args = vec!["merge", "--format", "json", "--report", "merged"];
    args.extend(names.iter().map(String::as_str));
    let (code, merged, err) = quorum(&args, tmp.path());
    assert_eq!(code, 0, "{err}");
    assert_eq!(without_repro(&merged), without_repro(&single));
    let dir = tmp.path().join("merged");
    assert!(dir.join(".quorum-report").exists());
    for plot in ["plots/type-i-error-n5.svg", "plots/type-i-error-n8.svg", "plots/power-A.svg"] {
        let svg = std::fs::read_to_string(dir.join(plot)).unwrap();
        assert!(svg.starts_with("<svg") && svg.contains("classical"), "{plot}");
    }
    // Text output names what the rates are.
    let (code, text, _) = quorum(&["merge", "merged/results.json"], tmp.path());
    assert_eq!(code, 0);
    assert!(text.contains("Power — the term has an effect") && text.contains("Type-I error"), "{text}");
}

#[test]
fn command_line_usage_errors_name_the_flag() {
    let tmp = tempfile::tempdir().unwrap();
    for (args, needle) in [
        (vec!["plan", "--design", "3x2"], "--n"),
        (vec!["plan", "--design", "3x2", "--n", "20", "--effect", "C=0.2"], "term `C`"),
        (vec!["plan", "--design", "3x2", "--n", "20", "--errors", "t:2"], "2 df"),
        (vec!["plan", "--design", "3x2", "--n", "20", "--sd-ratio", "1,2"], "--sd-ratio"),
        (vec!["plan", "--design", "3x2", "--n", "20", "--shard", "5/4"], "--shard"),
        (vec!["plan", "--n", "20"], "scenario"),
        (vec!["merge", "nothing.json"], "nothing.json"),
    ] {
        let (code, _, err) = quorum(&args, tmp.path());
        assert_eq!(code, 2, "{args:?}: {err}");
        assert!(err.contains(needle), "{args:?}: {err}");
    }
}

#[test]
fn analyze_calibrate_adds_a_calibration_block() {
    let tmp = tempfile::tempdir().unwrap();
    let data = repo_path("tests/data/toothgrowth.csv");
    let data = data.to_str().unwrap();
    let (code, out, err) = quorum(
        &["analyze", data, "-y", "len", "-f", "supp,dose", "--calibrate", "--calibrate-sims", "64", "--format", "json"],
        tmp.path(),
    );
    assert_eq!(code, 0, "{err}");
    let v: Value = serde_json::from_str(&out).unwrap();
    let rows = v["calibration"]["rows"].as_array().unwrap();
    assert_eq!(v["calibration"]["sims"], 64);
    assert!(rows.iter().any(|r| r["engine"] == "classical" && r["kind"] == "type-i-error"));
    assert!(rows.iter().any(|r| r["engine"] == "rank-ats" && r["kind"] == "rejection-rate"));
    let (code, text, _) =
        quorum(&["analyze", data, "-y", "len", "-f", "supp,dose", "--calibrate", "--calibrate-sims", "64"], tmp.path());
    assert_eq!(code, 0);
    assert!(text.contains("Calibration on these data"), "{text}");
    let (code, _, err) = quorum(&["describe", data, "-y", "len", "-f", "supp,dose", "--calibrate"], tmp.path());
    assert_eq!(code, 2, "{err}");
}
