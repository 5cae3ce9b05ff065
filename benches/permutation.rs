//! Permutation engines against the floor of a bare shuffle-and-sum loop (issue 5 speed
//! targets), on a generated 2×3 design with N = 240, 10 000 and 1 000 000 rows.
//!
//!     cargo bench --bench permutation
//!
//! Each benchmark runs B permutations of every term on all cores: the floor (restore
//! canonical order, Fisher–Yates from the shared stream, sum each cell's contiguous
//! range; no statistics), the `permutation` engine under Freedman–Lane, ter Braak and
//! Manly, and the `studentized-permutation` engine. Throughput is reported in
//! permutations (elements = B). The numpy and statsmodels comparison is
//! `benches/compare/compare.py`.

use criterion::{criterion_group, criterion_main, BenchmarkId, Criterion, Throughput};
use quorum::config::*;
use quorum::design::forms::SsForms;
use quorum::design::{Design, Factor};
use quorum::engines::permutation::Permutation;
use quorum::engines::studentized_permutation::StudentizedPermutation;
use quorum::engines::{Context, Engine};
use quorum::model::Fit;
use quorum::resample::par_chunks;
use quorum::resample::permute::permuted_chunk;
use std::hint::black_box;

/// A 2×3 design with N rows spread evenly over the cells (fixed pseudo-random values).
fn design(n: usize) -> Design {
    let mut x: u64 = 0x9E37_79B9_7F4A_7C15;
    let cells: Vec<Vec<f64>> = (0..6)
        .map(|c| {
            let size = n / 6 + usize::from(c < n % 6);
            (0..size)
                .map(|_| {
                    x ^= x << 13;
                    x ^= x >> 7;
                    x ^= x << 17;
                    10.0 + 0.05 * c as f64 + (x >> 11) as f64 / (1u64 << 53) as f64
                })
                .collect()
        })
        .collect();
    let f = |name: &str, a: usize| Factor {
        name: name.into(),
        levels: (0..a).map(|i| format!("{name}{i}")).collect(),
        measured: false,
    };
    Design::from_cells("y", vec![f("A", 2), f("B", 3)], &cells).unwrap()
}

/// The floor: per resample, canonical order, Fisher–Yates, contiguous cell sums.
fn shuffle_and_sum(values: &[f64], starts: &[usize], b: u64) -> f64 {
    let parts = par_chunks(0, b, |task| {
        let mut work = values.to_vec();
        let mut acc = 0.0;
        permuted_chunk(task, 1, values, &mut work, |_, arranged| {
            for c in 0..starts.len() - 1 {
                acc += arranged[starts[c]..starts[c + 1]].iter().sum::<f64>() * (c + 1) as f64;
            }
        });
        acc
    });
    parts.iter().sum()
}

fn bench(c: &mut Criterion) {
    let mut g = c.benchmark_group("permutation_2x3");
    g.sample_size(10);
    for (n, b) in [(240usize, 9_999u64), (10_000, 2_047), (1_000_000, 31)] {
        let d = design(n);
        let fit = Fit::new(&d);
        let forms = SsForms::new(&d.layout, &fit.n, SsType::Three).unwrap();
        let mut starts = vec![0];
        starts.extend((0..d.n_cells()).map(|c| d.cell_range(c).end));
        g.throughput(Throughput::Elements(b));
        g.bench_with_input(BenchmarkId::new("floor_shuffle_and_sum", n), &n, |bench, _| {
            bench.iter(|| shuffle_and_sum(black_box(d.y()), &starts, b))
        });
        for (name, scheme) in [
            ("freedman_lane", PermutationScheme::FreedmanLane),
            ("ter_braak", PermutationScheme::TerBraak),
            ("manly", PermutationScheme::Manly),
        ] {
            let settings = Settings {
                quiet: true,
                permutations: b,
                max_permutations: b,
                permutation_scheme: scheme,
                ..Settings::default()
            };
            let ctx = Context { design: &d, fit: &fit, forms: &forms, settings: &settings };
            g.bench_with_input(BenchmarkId::new(name, n), &n, |bench, _| {
                bench.iter(|| Permutation.run(black_box(&ctx)).unwrap())
            });
        }
        let settings = Settings { quiet: true, permutations: b, max_permutations: b, ..Settings::default() };
        let ctx = Context { design: &d, fit: &fit, forms: &forms, settings: &settings };
        g.bench_with_input(BenchmarkId::new("studentized", n), &n, |bench, _| {
            bench.iter(|| StudentizedPermutation.run(black_box(&ctx)).unwrap())
        });
    }
    g.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
