//! Timing of the p-value functions that run inside resampling loops and of the slower
//! families, so that a change in their cost is visible (`cargo bench --bench dist`).

use criterion::{criterion_group, criterion_main, Criterion};
use quorum::dist::{chi2_sf, f_sf, ncf_cdf, ncf_lambda_interval, normal_sf, ptukey_sf, t_sf};
use std::hint::black_box;

fn central(c: &mut Criterion) {
    c.bench_function("f_sf(3.1, 2, 33)", |b| b.iter(|| f_sf(black_box(3.1), black_box(2.0), black_box(33.0))));
    c.bench_function("f_sf(24.7, 5, 1e6)", |b| b.iter(|| f_sf(black_box(24.7), black_box(5.0), black_box(1e6))));
    c.bench_function("f_sf(1.0, 1e4, 1e4)", |b| b.iter(|| f_sf(black_box(1.0), black_box(1e4), black_box(1e4))));
    c.bench_function("t_sf(2.1, 12.5)", |b| b.iter(|| t_sf(black_box(2.1), black_box(12.5))));
    c.bench_function("chi2_sf(25.0, 8)", |b| b.iter(|| chi2_sf(black_box(25.0), black_box(8.0))));
    c.bench_function("normal_sf(3.3)", |b| b.iter(|| normal_sf(black_box(3.3))));
}

fn slow(c: &mut Criterion) {
    c.bench_function("ncf_cdf(8, 1, 33, 20)", |b| {
        b.iter(|| ncf_cdf(black_box(8.0), black_box(1.0), black_box(33.0), black_box(20.0)))
    });
    c.bench_function("ncf_lambda_interval(24.7, 2, 33)", |b| {
        b.iter(|| ncf_lambda_interval(black_box(24.68232073), black_box(2.0), black_box(33.0), 0.95))
    });
    c.bench_function("ptukey_sf(3.2, 6, 33)", |b| {
        b.iter(|| ptukey_sf(black_box(3.2), black_box(6.0), black_box(33.0)))
    });
}

criterion_group!(benches, central, slow);
criterion_main!(benches);
