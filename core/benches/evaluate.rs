//! Benchmark of a full evaluation (61 averaging times with breakdown and mod sigma, g(t),
//! the Dick sum to 1e-6, line shape, checkpoints, time to target) of each demo design,
//! single-threaded. Prints the median and spread of the wall time per evaluation.
//!
//! Run: `cargo bench -p clockwright-core --bench evaluate`

use clockwright_core::{demo, evaluate, EvalOptions};
use std::hint::black_box;
use std::time::Instant;

fn main() {
    let opts = EvalOptions::default();
    println!("full evaluation, {} averaging times, single thread", opts.tau_points);
    for d in demo::designs() {
        // Warm up, then time batches so each sample is well above the clock resolution.
        for _ in 0..20 {
            black_box(evaluate(&d, &opts).unwrap());
        }
        let mut samples = Vec::new();
        for _ in 0..40 {
            let t0 = Instant::now();
            for _ in 0..10 {
                black_box(evaluate(black_box(&d), &opts).unwrap());
            }
            samples.push(t0.elapsed().as_secs_f64() / 10.0);
        }
        samples.sort_by(|a, b| a.partial_cmp(b).unwrap());
        let e = evaluate(&d, &opts).unwrap();
        println!(
            "{:<34} median {:>8.1} us  (p10 {:>8.1}, p90 {:>8.1})  harmonics {:>5}",
            d.name,
            samples[samples.len() / 2] * 1e6,
            samples[samples.len() / 10] * 1e6,
            samples[samples.len() * 9 / 10] * 1e6,
            e.dick.harmonics_summed
        );
    }
}
