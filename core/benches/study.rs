//! Benchmark of the studies, native, one thread: a 100-point sweep of the four demo designs
//! (400 evaluations) and a 50x50 map of one design (2500 evaluations with contours), plus
//! the optimum probe time of each demo design and a 200-sample uncertainty band.
//! Prints the median and spread of the wall time, and the median time on a CPU.
//!
//! Run: `cargo bench -p clockwright-core --bench study`

use clockwright_core::demo;
use clockwright_core::study::sweep::{Axis, Spacing};
use clockwright_core::study::*;
use clockwright_core::study::bands::{Distribution, Uncertain};
use std::hint::black_box;
use std::time::Instant;

/// Time this thread spent on a CPU, s, from Linux's schedstat (None elsewhere): on a
/// shared machine it is steadier than the wall time, but only good to about one scheduler
/// tick (a few ms), so read it for the longer runs.
fn cpu_s() -> Option<f64> {
    let text = std::fs::read_to_string("/proc/thread-self/schedstat").ok()?;
    text.split_whitespace().next()?.parse::<f64>().ok().map(|ns| ns * 1e-9)
}

fn time(label: &str, runs: usize, mut f: impl FnMut()) {
    f();
    let mut wall = Vec::new();
    let mut cpu = Vec::new();
    for _ in 0..runs {
        let (t0, c0) = (Instant::now(), cpu_s());
        f();
        wall.push(t0.elapsed().as_secs_f64());
        if let (Some(a), Some(b)) = (c0, cpu_s()) {
            cpu.push(b - a);
        }
    }
    wall.sort_by(|a, b| a.total_cmp(b));
    cpu.sort_by(|a, b| a.total_cmp(b));
    let n = wall.len();
    let on_cpu = if cpu.is_empty() { String::new() } else { format!("  on-CPU median {:>8.1} ms", cpu[cpu.len() / 2] * 1e3) };
    println!("{label:<62} wall median {:>8.1} ms (min {:>8.1}, max {:>8.1}){on_cpu}", wall[n / 2] * 1e3, wall[0] * 1e3, wall[n - 1] * 1e3);
}

fn main() {
    let designs = demo::designs();
    println!("studies, native, single thread");
    let sweep_req = GridRequest {
        x: Axis { path: "atoms.count".into(), from: 1.0, to: 20.0, points: 100, spacing: Spacing::Linear },
        y: None,
        output: Output::SigmaAt { tau_s: 1000.0 },
        levels: None,
    };
    time("sweep: 4 designs x 100 points, atoms.count 1 to 20 (20 distinct)", 9, || {
        black_box(sweep(black_box(&designs), &sweep_req).unwrap());
    });
    let distinct = GridRequest { x: Axis { path: "atoms.count".into(), from: 1.0, to: 100.0, points: 100, spacing: Spacing::Linear }, ..sweep_req.clone() };
    time("sweep: 4 designs x 100 points, atoms.count 1 to 100", 9, || {
        black_box(sweep(black_box(&designs), &distinct).unwrap());
    });
    let probe = GridRequest {
        x: Axis { path: "sequence.segments[2].duration_s".into(), from: 0.01, to: 1.0, points: 100, spacing: Spacing::Log },
        ..sweep_req.clone()
    };
    time("sweep: 4 designs x 100 points, segments[2] 0.01 to 1 s (log)", 9, || {
        black_box(sweep(black_box(&designs), &probe).unwrap());
    });
    let map_req = GridRequest {
        x: Axis { path: "atoms.count".into(), from: 1.0, to: 50.0, points: 50, spacing: Spacing::Linear },
        y: Some(Axis { path: "sequence.segments[3].duration_s".into(), from: 0.01, to: 1.0, points: 50, spacing: Spacing::Log }),
        output: Output::TimeToTarget { target: 1e-18 },
        levels: None,
    };
    let one = &designs[1..2];
    time("map: 50 x 50 of atoms.count and free time, time to 1e-18", 3, || {
        black_box(map(black_box(one), &map_req).unwrap());
    });
    let map_sigma = GridRequest { output: Output::SigmaAt { tau_s: 1000.0 }, ..map_req.clone() };
    time("map: 50 x 50 of atoms.count and free time, sigma at 1000 s", 3, || {
        black_box(map(black_box(one), &map_sigma).unwrap());
    });
    for d in &designs {
        let o = optimum(d, &OptimumRequest::at(1000.0)).unwrap();
        time(&format!("optimum at 1000 s: {} ({} evaluations)", d.name, o.evaluations), 5, || {
            black_box(optimum(black_box(d), &OptimumRequest::at(1000.0)).unwrap());
        });
    }
    let band = BandRequest::new(vec![
        Uncertain { path: "laser.noise[1].sigma_y".into(), distribution: Distribution::LogNormal { median: 5e-17, sigma_ln: 0.5 } },
        Uncertain { path: "atoms.count".into(), distribution: Distribution::Uniform { low: 1.0, high: 4.0 } },
    ]);
    time("bands: 200 Latin hypercube samples of the single ion", 3, || {
        black_box(bands(black_box(&designs[0]), &band).unwrap());
    });
}
