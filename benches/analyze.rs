//! End-to-end cost of `analyze` with the classical engine and the cell table, against
//! the floor of merely parsing the outcome column (numerical-accuracy issue: within 3×
//! at N = 1 000 000 rows of a 3×4 design). Data are generated here, in memory.
//!
//!     cargo bench --bench analyze

use criterion::{criterion_group, criterion_main, BenchmarkId, Criterion};
use quorum::config::*;
use quorum::error::Location;
use std::hint::black_box;

#[path = "support/analyze_data.rs"]
mod analyze_data;
pub use analyze_data::make_csv;

fn spec() -> DataSpec {
    DataSpec::new(Source::Stdin, "response", &["dose", "site"])
}

/// The floor: read every record and parse the outcome field as f64.
fn parse_outcome_only(bytes: &[u8]) -> f64 {
    let mut r = csv::ReaderBuilder::new().from_reader(bytes);
    let mut rec = csv::ByteRecord::new();
    let mut sum = 0.0;
    while r.read_byte_record(&mut rec).unwrap() {
        let v: f64 = std::str::from_utf8(&rec[3]).unwrap().parse().unwrap();
        sum += v;
    }
    sum
}

fn analyze(bytes: &[u8]) -> usize {
    let spec = spec();
    let obs = quorum::data::parse(bytes, &spec, "bench.csv", &Location::file("bench.csv")).unwrap();
    let design = quorum::design::Design::build(&obs, &spec).unwrap();
    let config = Config {
        job: Job::Analyze,
        data: spec,
        settings: Settings { engines: vec!["classical".into()], quiet: true, ..Settings::default() },
        output: OutputSpec { format: Format::Json, report_dir: None },
        command: "bench".into(),
    };
    let input = quorum::results::InputSummary { path: "bench".into(), rows_read: 0, rows_used: 0, dropped: vec![] };
    let a = quorum::analysis::analyse_design(&config, &design, input).unwrap();
    a.engines.len()
}

/// The analysis without the diagnostics: read, design, fit, the cell table and marginal
/// means, and the classical engine (the "classical engine, cell table").
fn analyze_core(bytes: &[u8]) -> usize {
    use quorum::engines::{classical::Classical, Context, Engine};
    let spec = spec();
    let obs = quorum::data::parse(bytes, &spec, "bench.csv", &Location::file("bench.csv")).unwrap();
    let design = quorum::design::Design::build(&obs, &spec).unwrap();
    let fit = quorum::model::Fit::new(&design);
    let settings = Settings { engines: vec!["classical".into()], quiet: true, ..Settings::default() };
    let cells = quorum::diagnostics::cells::cell_table(&design, settings.trim, settings.ci_level);
    let marginals = quorum::diagnostics::cells::marginal_means(&design, &fit, settings.ci_level);
    let forms = quorum::design::forms::SsForms::new(&design.layout, &fit.n, SsType::Three).unwrap();
    let ctx = Context { design: &design, fit: &fit, forms: &forms, settings: &settings };
    let r = Classical.run(&ctx).unwrap();
    cells.len() + marginals.len() + r.terms.len()
}

fn bench(c: &mut Criterion) {
    let mut g = c.benchmark_group("analyze_3x4");
    g.sample_size(10);
    for n in [10_000usize, 1_000_000] {
        let bytes = make_csv(n);
        g.bench_with_input(BenchmarkId::new("parse_outcome_only", n), &bytes, |b, bytes| {
            b.iter(|| parse_outcome_only(black_box(bytes)))
        });
        g.bench_with_input(BenchmarkId::new("core_classical_cell_table", n), &bytes, |b, bytes| {
            b.iter(|| analyze_core(black_box(bytes)))
        });
        g.bench_with_input(BenchmarkId::new("analyze_classical", n), &bytes, |b, bytes| {
            b.iter(|| analyze(black_box(bytes)))
        });
    }
    g.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
