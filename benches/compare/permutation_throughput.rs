//! Throughput of the permutation engines against the floor of a bare shuffle-and-sum
//! loop, on a data file, for `benches/compare/compare.py` (which times numpy and
//! statsmodels on the same file in the same run and prints the ratios).
//!
//!     cargo run --release --example permutation_throughput -- FILE.csv OUTCOME A,B PERMUTATIONS
//!
//! Prints one JSON object: seconds and rates for the floor (shuffle + contiguous cell
//! sums, no statistics; with and without restoring canonical order before each
//! shuffle), and for the `permutation` engine under each scheme and the
//! `studentized-permutation` engine (every term, on all cores). Each is the fastest of
//! `QUORUM_BENCH_ROUNDS` (default 3) interleaved rounds.

use quorum::config::*;
use quorum::design::forms::SsForms;
use quorum::design::Design;
use quorum::engines::permutation::Permutation;
use quorum::engines::studentized_permutation::StudentizedPermutation;
use quorum::engines::{Context, Engine};
use quorum::model::Fit;
use quorum::resample::permute::permuted_chunk;
use quorum::resample::{par_chunks, Purpose};
use std::hint::black_box;
use std::time::Instant;

/// The floor: per resample, restore canonical order, Fisher–Yates shuffle from the
/// shared stream, sum every cell's contiguous range. No statistics.
pub fn shuffle_and_sum(values: &[f64], starts: &[usize], b: u64, seed: u64) -> f64 {
    let parts = par_chunks(0, b, |task| {
        let mut work = values.to_vec();
        let mut acc = 0.0;
        permuted_chunk(task, seed, values, &mut work, |_, arranged| {
            for c in 0..starts.len() - 1 {
                acc += arranged[starts[c]..starts[c + 1]].iter().sum::<f64>() * (c + 1) as f64;
            }
        });
        acc
    });
    parts.iter().sum()
}

/// The floor without restoring canonical order: each shuffle continues from the last.
pub fn shuffle_and_sum_in_place(values: &[f64], starts: &[usize], b: u64, seed: u64) -> f64 {
    let parts = par_chunks(0, b, |task| {
        let mut work = values.to_vec();
        let mut stream = task.stream(seed, Purpose::Permutation, 0, 0);
        let mut acc = 0.0;
        for _ in task.lo..task.hi {
            stream.shuffle(&mut work);
            for c in 0..starts.len() - 1 {
                acc += work[starts[c]..starts[c + 1]].iter().sum::<f64>() * (c + 1) as f64;
            }
        }
        acc
    });
    parts.iter().sum()
}

fn main() {
    let args: Vec<String> = std::env::args().collect();
    if args.len() != 5 {
        eprintln!("usage: permutation_throughput FILE.csv OUTCOME A,B PERMUTATIONS");
        std::process::exit(2);
    }
    let b: u64 = args[4].parse().expect("PERMUTATIONS is a count");
    let factors: Vec<&str> = args[3].split(',').collect();
    let spec = DataSpec::new(Source::File(args[1].clone().into()), &args[2], &factors);
    let obs = quorum::data::read(&spec).unwrap_or_else(|e| panic!("{e}"));
    let design = Design::build(&obs, &spec).unwrap_or_else(|e| panic!("{e}"));
    let fit = Fit::new(&design);
    let forms = SsForms::new(&design.layout, &fit.n, SsType::Three).unwrap();
    let values: Vec<f64> = design.y().to_vec();
    let mut starts = vec![0];
    starts.extend((0..design.n_cells()).map(|c| design.cell_range(c).end));
    let terms = design.terms().len();

    // The machine may be shared: every measurement is repeated in interleaved rounds
    // and the fastest round counts (the usual "best of k" under noise).
    let rounds: usize = std::env::var("QUORUM_BENCH_ROUNDS").ok().and_then(|v| v.parse().ok()).unwrap_or(3);
    black_box(shuffle_and_sum(&values, &starts, 256.min(b), 1));
    let schemes = [
        ("freedman-lane", PermutationScheme::FreedmanLane),
        ("ter-braak", PermutationScheme::TerBraak),
        ("manly", PermutationScheme::Manly),
    ];
    let settings_of = |scheme| Settings {
        quiet: true,
        permutations: b,
        max_permutations: b,
        permutation_scheme: scheme,
        ..Settings::default()
    };
    let mut best: std::collections::BTreeMap<&str, f64> = std::collections::BTreeMap::new();
    let mut ps: std::collections::BTreeMap<&str, Vec<Option<f64>>> = std::collections::BTreeMap::new();
    let mut keep = |key: &'static str, secs: f64| {
        let e = best.entry(key).or_insert(f64::INFINITY);
        *e = e.min(secs);
    };
    for _ in 0..rounds {
        let t = Instant::now();
        black_box(shuffle_and_sum(&values, &starts, b, 1));
        keep("floor", t.elapsed().as_secs_f64());
        let t = Instant::now();
        black_box(shuffle_and_sum_in_place(&values, &starts, b, 1));
        keep("floor_in_place", t.elapsed().as_secs_f64());
        for (key, scheme) in schemes {
            let settings = settings_of(scheme);
            let ctx = Context { design: &design, fit: &fit, forms: &forms, settings: &settings };
            let t = Instant::now();
            let r = Permutation.run(&ctx).unwrap();
            keep(key, t.elapsed().as_secs_f64());
            ps.insert(key, r.terms.iter().map(|t| t.p).collect());
        }
        let settings = settings_of(PermutationScheme::FreedmanLane);
        let ctx = Context { design: &design, fit: &fit, forms: &forms, settings: &settings };
        let t = Instant::now();
        let r = StudentizedPermutation.run(&ctx).unwrap();
        keep("studentized", t.elapsed().as_secs_f64());
        ps.insert("studentized", r.terms.iter().map(|t| t.p).collect());
    }
    let mut out = serde_json::json!({
        "n": design.n_obs(), "cells": design.n_cells(), "terms": terms, "permutations": b,
        "threads": rayon::current_num_threads(), "rounds": rounds,
    });
    for (key, secs) in &best {
        out[*key] = serde_json::json!({
            "seconds": secs, "permutations_per_s": b as f64 / secs,
            "term_tests_per_s": (b * terms as u64) as f64 / secs,
        });
        if let Some(p) = ps.get(key) {
            out[*key]["p"] = serde_json::json!(p);
        }
    }
    println!("{out}");
}
