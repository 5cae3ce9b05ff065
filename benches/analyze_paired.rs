//! The million-row `analyze` against its floor, timed in interleaved pairs.
//!
//! `cargo bench --bench analyze` (criterion) times the floor and `analyze` in separate
//! phases seconds apart; on a shared machine whose speed drifts, the ratio of the two
//! means then carries the drift. Here each pair times the floor (csv parse of the
//! outcome column) and the whole `analyze` (classical engine, as in the criterion
//! bench) back to back, alternating which goes first, and the ratio is taken within
//! the pair; the median over the pairs is the figure README "Performance" quotes.
//!
//!     cargo bench --bench analyze_paired            # 21 pairs at N = 1 000 000
//!     cargo bench --bench analyze_paired -- 41      # another number of pairs

use quorum::config::*;
use quorum::error::Location;
use std::hint::black_box;
use std::time::Instant;

#[path = "support/analyze_data.rs"]
mod analyze_data;

fn floor(bytes: &[u8]) -> f64 {
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
    let spec = DataSpec::new(Source::Stdin, "response", &["dose", "site"]);
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
    quorum::analysis::analyse_design(&config, &design, input).unwrap().engines.len()
}

fn seconds(f: impl FnOnce()) -> f64 {
    let t = Instant::now();
    f();
    t.elapsed().as_secs_f64()
}

fn median(v: &mut [f64]) -> f64 {
    v.sort_by(f64::total_cmp);
    let n = v.len();
    if n % 2 == 1 {
        v[n / 2]
    } else {
        (v[n / 2 - 1] + v[n / 2]) / 2.0
    }
}

fn main() {
    // `cargo bench` passes `--bench`; a bare number is the count of pairs.
    let pairs: usize = std::env::args().skip(1).find_map(|a| a.parse().ok()).unwrap_or(21);
    let bytes = analyze_data::make_csv(1_000_000);
    for _ in 0..2 {
        black_box(floor(black_box(&bytes)));
        black_box(analyze(black_box(&bytes)));
    }
    let (mut floors, mut wholes, mut ratios) = (Vec::new(), Vec::new(), Vec::new());
    for k in 0..pairs {
        let (f, w) = if k % 2 == 0 {
            let f = seconds(|| {
                black_box(floor(black_box(&bytes)));
            });
            (
                f,
                seconds(|| {
                    black_box(analyze(black_box(&bytes)));
                }),
            )
        } else {
            let w = seconds(|| {
                black_box(analyze(black_box(&bytes)));
            });
            (
                seconds(|| {
                    black_box(floor(black_box(&bytes)));
                }),
                w,
            )
        };
        floors.push(f);
        wholes.push(w);
        ratios.push(w / f);
    }
    let (lo, hi) = ratios.iter().fold((f64::INFINITY, 0.0f64), |(lo, hi), &r| (lo.min(r), hi.max(r)));
    let above = ratios.iter().filter(|&&r| r > 3.0).count();
    println!(
        "analyze_paired N = 1 000 000, {pairs} pairs: floor median {:.1} ms, analyze median {:.1} ms, \
         ratio median {:.2} (range {lo:.2}–{hi:.2}, {above} of {pairs} pairs above 3)",
        median(&mut floors) * 1e3,
        median(&mut wholes) * 1e3,
        median(&mut ratios),
    );
}
