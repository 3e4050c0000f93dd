//! Benchmark of pair evaluations and reach on the demo pair (independent lasers) and on the
//! same two designs made synchronous with one shared laser, single-threaded. Prints the
//! median and spread of the wall time per call.
//!
//! Run: `cargo bench -p clockwright-core --bench pair`

use clockwright_core::pair::{evaluate_pair, Comparison, PairDocument, PairOptions};
use clockwright_core::reach::{reach, ReachOptions};
use clockwright_core::{demo, design::Segment};
use std::hint::black_box;
use std::time::Instant;

fn time(label: &str, f: &dyn Fn()) {
    for _ in 0..3 {
        f();
    }
    let mut samples = Vec::new();
    for _ in 0..15 {
        let t0 = Instant::now();
        f();
        samples.push(t0.elapsed().as_secs_f64());
    }
    samples.sort_by(|a, b| a.partial_cmp(b).unwrap());
    println!("{label:<58} median {:>9.2} ms  (p10 {:>9.2}, p90 {:>9.2})", samples[7] * 1e3, samples[1] * 1e3, samples[13] * 1e3);
}

fn main() {
    let p = demo::pairs().remove(0);
    // The shared-laser variant: lengthen the shorter cycle's cooling so both cycles are equal.
    let mut q: PairDocument = p.clone();
    q.comparison = Comparison::SharedLaser;
    let extra = q.a.cycle_time_s() - q.b.cycle_time_s();
    let shorter = if extra > 0.0 { &mut q.b } else { &mut q.a };
    if let Segment::Dead { label, duration_s } = shorter.sequence.segments[0].clone() {
        shorter.sequence.segments[0] = Segment::Dead { label, duration_s: duration_s + extra.abs() };
    }
    let po = PairOptions::default();
    let ro = ReachOptions::default();
    time(&format!("evaluate_pair, independent lasers, {} taus", po.tau_points), &|| {
        black_box(evaluate_pair(black_box(&p), &po).unwrap());
    });
    time("evaluate_pair, shared laser (differential Dick sum)", &|| {
        black_box(evaluate_pair(black_box(&q), &po).unwrap());
    });
    time(&format!("reach, independent lasers, {} masses", ro.mass_points), &|| {
        black_box(reach(black_box(&p), &ro).unwrap());
    });
    time(&format!("reach, shared laser, {} masses", ro.mass_points), &|| {
        black_box(reach(black_box(&q), &ro).unwrap());
    });
}
