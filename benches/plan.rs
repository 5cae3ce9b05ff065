//! Cost of `quorum plan`: a 3×2 design with n = 20 per cell, normal errors and an effect
//! on A (so both the null and the effects condition run), 1000 simulations, every
//! engine in the registry with 999 permutations and 999 bootstrap resamples. The goal
//! (issue 12) is under 60 s of wall time on 2 cores; the README's performance section
//! records the figure and the engines that were in the registry when it was measured.
//!
//!     cargo bench --bench plan

use criterion::{criterion_group, criterion_main, Criterion};
use quorum::config::{Format, OutputSpec, Settings};
use quorum::plan::draws::ErrorFamily;
use quorum::plan::scenario::{DesignedSpec, MeanSpec};
use quorum::plan::{self, PlanConfig, PlanSource, Sizes};
use std::hint::black_box;
use std::time::Duration;

fn config(sims: u64) -> PlanConfig {
    PlanConfig {
        source: PlanSource::Designed(DesignedSpec {
            shape: vec![3, 2],
            means: MeanSpec::Effects(vec![("A".into(), 0.25)]),
            errors: ErrorFamily::Normal,
            sd_ratio: None,
        }),
        sizes: Sizes::Equal(vec![20]),
        sims,
        settings: Settings { permutations: 999, resamples: 999, quiet: true, ..Settings::default() },
        shard: None,
        max_time: None,
        output: OutputSpec { format: Format::Json, report_dir: None },
        command: "bench".into(),
    }
}

fn bench(c: &mut Criterion) {
    let mut g = c.benchmark_group("plan");
    g.sample_size(10).measurement_time(Duration::from_secs(3)).warm_up_time(Duration::from_millis(1));
    let cfg = config(1000);
    g.bench_function("3x2_n20_1000_sims_all_engines", |b| b.iter(|| black_box(plan::run(&cfg).unwrap().rates.len())));
    g.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
