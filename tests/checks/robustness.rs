//! Property tests: random bytes and random CSV files never make the loader or a whole
//! analysis panic; every failure is a typed error with a documented exit code, and
//! every number in a successful result is finite or absent.

use proptest::prelude::*;
use quorum::config::*;
use quorum::error::Location;

fn spec(factors: &[&str]) -> DataSpec {
    DataSpec::new(Source::Stdin, "y", factors)
}

fn analyse(bytes: &[u8], spec: &DataSpec) -> Result<(), i32> {
    let loc = Location::file("fuzz.csv");
    let obs = quorum::data::parse(bytes, spec, "fuzz.csv", &loc).map_err(|e| e.exit_code())?;
    let design = quorum::design::Design::build(&obs, spec).map_err(|e| e.exit_code())?;
    let config = Config {
        job: Job::Analyze,
        data: spec.clone(),
        settings: Settings { quiet: true, ..Settings::default() },
        output: OutputSpec { format: Format::Json, report_dir: None },
        command: "fuzz".into(),
    };
    let input = quorum::results::InputSummary { path: "fuzz.csv".into(), rows_read: 0, rows_used: 0, dropped: vec![] };
    let a = quorum::analysis::analyse_design(&config, &design, input).map_err(|e| e.exit_code())?;
    // Invariant of the contract: every p is in [0, 1], or absent with a reason.
    for e in &a.engines {
        for t in &e.terms {
            match t.p {
                Some(p) => assert!((0.0..=1.0).contains(&p), "{}: p = {p}", t.term),
                None => assert!(t.not_applicable.is_some(), "{}: p absent without a reason", t.term),
            }
        }
    }
    serde_json::to_string(&a).expect("results serialise");
    Ok(())
}

/// A field: a number, a label, a missing token, or junk.
fn field() -> impl Strategy<Value = String> {
    prop_oneof![
        (-1000i32..1000, 0u8..3).prop_map(|(v, d)| format!("{:.*}", d as usize, v as f64 / 7.0)),
        prop::sample::select(vec![
            "a", "b", "c", "A", "1", "1.0", " a", "NA", "", ".", "NaN", "inf", "1e400", "\"x,y\"", "7,5"
        ])
        .prop_map(String::from),
        "[ -~]{0,6}",
    ]
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 300, ..ProptestConfig::default() })]

    #[test]
    fn random_bytes_never_panic(bytes in prop::collection::vec(any::<u8>(), 0..400)) {
        if let Err(code) = analyse(&bytes, &spec(&["g"])) {
            prop_assert!(code == 2 || code == 3, "exit code {code}");
        }
    }

    #[test]
    fn random_csv_never_panics(
        rows in prop::collection::vec((field(), field(), field()), 0..30),
        delim in prop::sample::select(vec![",", ";", "\t"]),
        crlf in any::<bool>(),
    ) {
        let eol = if crlf { "\r\n" } else { "\n" };
        let mut text = format!("y{delim}g{delim}h{eol}");
        for (y, g, h) in rows {
            text.push_str(&format!("{y}{delim}{g}{delim}{h}{eol}"));
        }
        for factors in [&["g"][..], &["g", "h"][..]] {
            if let Err(code) = analyse(text.as_bytes(), &spec(factors)) {
                prop_assert!(code == 2 || code == 3, "exit code {code} for {text:?}");
            }
        }
    }

    #[test]
    fn random_valid_designs_analyse_cleanly(
        cells in prop::collection::vec(prop::collection::vec(-50i32..50, 1..6), 6),
    ) {
        // Property: a complete 2×3 design with any cell sizes and values either analyses
        // (finite numbers or nulls) or stops with exit 3 (no residual df, constant outcome).
        let mut text = String::from("y,g,h\n");
        for (c, values) in cells.iter().enumerate() {
            for v in values {
                text.push_str(&format!("{},{},{}\n", *v as f64 / 4.0, ["p", "q"][c / 3], ["r", "s", "t"][c % 3]));
            }
        }
        if let Err(code) = analyse(text.as_bytes(), &spec(&["g", "h"])) {
            prop_assert_eq!(code, 3);
        }
    }
}
