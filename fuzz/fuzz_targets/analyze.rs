//! Fuzz target: small random designs through every engine and every renderer.
//! Property: never a panic; every p is in [0, 1] or absent with a reason; every
//! statistic, df and effect is finite when present; every report format (text, JSON,
//! CSV, Markdown, HTML with its SVG plots) renders.
#![no_main]

use libfuzzer_sys::fuzz_target;
use quorum::config::{Config, DataSpec, Format, Job, OutputSpec, Settings, Source};
use quorum::design::{Design, Factor};
use quorum::report::Render;

fuzz_target!(|data: &[u8]| {
    if data.len() < 3 {
        return;
    }
    // Shape from the first bytes: 1–3 factors with 2–3 levels; cell sizes and values from the rest.
    let k = 1 + (data[0] % 3) as usize;
    let shape: Vec<usize> = (0..k).map(|f| 2 + (data[1] >> f & 1) as usize).collect();
    let cells: usize = shape.iter().product();
    let mut bytes = data[2..].iter().copied().cycle();
    let mut values = Vec::with_capacity(cells);
    for _ in 0..cells {
        let n = 1 + (bytes.next().unwrap_or(0) % 5) as usize;
        let cell: Vec<f64> = (0..n).map(|_| (bytes.next().unwrap_or(0) as i8) as f64 / 4.0).collect();
        values.push(cell);
    }
    let names = ["A", "B", "C"];
    let factors: Vec<Factor> = shape
        .iter()
        .enumerate()
        .map(|(f, &a)| Factor { name: names[f].into(), levels: (0..a).map(|l| format!("l{l}")).collect(), measured: false })
        .collect();
    let Ok(design) = Design::from_cells("y", factors, &values) else { return };
    let config = Config {
        job: Job::Analyze,
        data: DataSpec::new(Source::Stdin, "y", &names[..k]),
        settings: Settings { permutations: 99, resamples: 99, max_permutations: 199, quiet: true, ..Settings::default() },
        output: OutputSpec { format: Format::Json, report_dir: None },
        command: "fuzz".into(),
    };
    let input = quorum::results::InputSummary { path: "fuzz".into(), rows_read: 0, rows_used: 0, dropped: vec![] };
    match quorum::analysis::analyse_design(&config, &design, input) {
        Ok(a) => {
            for e in &a.engines {
                for t in &e.terms {
                    match t.p {
                        Some(p) => assert!((0.0..=1.0).contains(&p), "{} {}: p = {p}", e.engine, t.term),
                        None => assert!(t.not_applicable.is_some(), "{} {}: no p and no reason", e.engine, t.term),
                    }
                    for v in [t.statistic, t.df1, t.df2].into_iter().flatten() {
                        assert!(v.is_finite(), "{} {}", e.engine, t.term);
                    }
                }
            }
            for format in [Format::Text, Format::Json, Format::Csv, Format::Markdown] {
                let mut out = Vec::new();
                quorum::report::renderer(format).render(&a, &mut out).expect("writing to memory");
            }
            let plots = quorum::report::plots::all(&a);
            let mut out = Vec::new();
            quorum::report::html::Html { plots: &plots }.render(&a, &mut out)
                .expect("writing to memory");
        }
        Err(e) => assert_eq!(e.exit_code(), 3, "{e}"),
    }
});
