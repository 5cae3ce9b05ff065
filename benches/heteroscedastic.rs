//! Cost of the heteroscedasticity-robust engines: `hc` and `trimmed` (F reference) on a
//! 3×4 design at N = 10 000 and 1 000 000 rows, and the trimmed engine's bootstrap
//! critical value (B = 1999 stratified resamples, every term) at N = 120 and 1200.
//! Data are generated in memory (fixed pseudo-random values).
//!
//!     cargo bench --bench heteroscedastic

use criterion::{criterion_group, criterion_main, BenchmarkId, Criterion};
use quorum::config::*;
use quorum::design::forms::SsForms;
use quorum::design::{Design, Factor};
use quorum::engines::{self, Context};
use quorum::model::Fit;
use std::hint::black_box;

/// A 3×4 design with about `n` observations, unequal spreads across cells.
fn design(n: usize) -> Design {
    let mut x: u64 = 0x2545F4914F6CDD1D;
    let mut cells: Vec<Vec<f64>> = (0..12).map(|_| Vec::with_capacity(n / 12 + 1)).collect();
    for i in 0..n {
        x ^= x << 13;
        x ^= x >> 7;
        x ^= x << 17;
        let c = i % 12;
        cells[c].push(50.0 + (1 + c % 4) as f64 * ((x % 10_000) as f64 / 1000.0 - 5.0));
    }
    let factor = |name: &str, a: usize| Factor {
        name: name.into(),
        levels: (0..a).map(|l| format!("{name}{l}")).collect(),
        measured: false,
    };
    Design::from_cells("y", vec![factor("dose", 3), factor("site", 4)], &cells).unwrap()
}

fn run(design: &Design, settings: &Settings) -> usize {
    let fit = Fit::new(design);
    let forms = SsForms::new(&design.layout, &fit.n, SsType::Three).unwrap();
    let ctx = Context { design, fit: &fit, forms: &forms, settings };
    engines::run_selected(&ctx).unwrap().len()
}

fn bench(c: &mut Criterion) {
    let mut g = c.benchmark_group("heteroscedastic_3x4");
    g.sample_size(10);
    for n in [10_000usize, 1_000_000] {
        let d = design(n);
        for id in ["hc", "trimmed"] {
            let settings = Settings { engines: vec![id.into()], quiet: true, ..Settings::default() };
            g.bench_with_input(BenchmarkId::new(id, n), &d, |b, d| b.iter(|| run(black_box(d), &settings)));
        }
    }
    for n in [120usize, 1200] {
        let d = design(n);
        let settings = Settings {
            engines: vec!["trimmed".into()],
            wj_reference: WjReference::Bootstrap,
            // No extension near α: time exactly B = 1999 resamples.
            max_permutations: 1999,
            quiet: true,
            ..Settings::default()
        };
        g.bench_with_input(BenchmarkId::new("trimmed_bootstrap_1999", n), &d, |b, d| {
            b.iter(|| run(black_box(d), &settings))
        });
    }
    g.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
