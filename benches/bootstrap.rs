//! Cost of the `bootstrap` engine on a 2×3 design with N = 10 000 rows and B = 1999:
//! every stratified interval (cell means and trimmed means, marginal means, level
//! differences, interaction contrasts, partial η² and ω², robust d — percentile and BCa
//! with jackknife acceleration and Monte Carlo errors), and the whole engine (those
//! intervals plus the wild-bootstrap test of every term). Data are generated in memory
//! (fixed pseudo-random skewed values). Compare with benches/compare/bootstrap_scipy.py,
//! which times scipy's `stats.bootstrap` on the six cell means alone.
//!
//!     cargo bench --bench bootstrap

use criterion::{criterion_group, criterion_main, Criterion};
use quorum::config::*;
use quorum::design::forms::SsForms;
use quorum::design::{Design, Factor};
use quorum::engines::bootstrap::{intervals, Bootstrap};
use quorum::engines::{Context, Engine};
use quorum::model::Fit;
use quorum::resample::progress::Visibility;
use std::hint::black_box;

/// A 2×3 design with `n` observations: exponential-like cells of unequal spread.
pub fn design(n: usize) -> Design {
    let mut x: u64 = 0x9E37_79B9_7F4A_7C15;
    let mut cells: Vec<Vec<f64>> = (0..6).map(|_| Vec::with_capacity(n / 6 + 1)).collect();
    for i in 0..n {
        x ^= x << 13;
        x ^= x >> 7;
        x ^= x << 17;
        let u = ((x >> 11) as f64 + 0.5) / (1u64 << 53) as f64;
        let c = i % 6;
        cells[c].push(20.0 + c as f64 - (1.0 + c as f64 * 0.5) * u.ln());
    }
    let factor = |name: &str, a: usize| Factor {
        name: name.into(),
        levels: (0..a).map(|l| format!("{name}{l}")).collect(),
        measured: false,
    };
    Design::from_cells("y", vec![factor("dose", 2), factor("site", 3)], &cells).unwrap()
}

fn bench(c: &mut Criterion) {
    let d = design(10_000);
    let fit = Fit::new(&d);
    let forms = SsForms::new(&d.layout, &fit.n, SsType::Three).unwrap();
    let mut g = c.benchmark_group("bootstrap_2x3_n10000_b1999");
    g.sample_size(10);
    g.bench_function("all_intervals", |b| {
        b.iter(|| {
            let rep =
                intervals::replicate(black_box(&d), &fit, &forms, 0.2, 1999, DEFAULT_SEED, Visibility::Hidden).unwrap();
            intervals::summarise(&rep, 0.95).len()
        })
    });
    // The same work on one thread: the CPU time it takes, for comparison with scipy's
    // single-threaded numpy.
    let one = rayon::ThreadPoolBuilder::new().num_threads(1).build().unwrap();
    g.bench_function("all_intervals_1_thread", |b| {
        b.iter(|| {
            one.install(|| {
                let rep =
                    intervals::replicate(black_box(&d), &fit, &forms, 0.2, 1999, DEFAULT_SEED, Visibility::Hidden)
                        .unwrap();
                intervals::summarise(&rep, 0.95).len()
            })
        })
    });
    // No extension near α: exactly B = 1999 wild resamples per term.
    let settings = Settings { resamples: 1999, max_permutations: 1999, quiet: true, ..Settings::default() };
    g.bench_function("engine_test_and_intervals", |b| {
        b.iter(|| {
            Bootstrap
                .run(&Context { design: black_box(&d), fit: &fit, forms: &forms, settings: &settings })
                .unwrap()
                .terms
                .len()
        })
    });
    g.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
