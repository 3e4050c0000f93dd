//! Timing entry for the side-by-side speed comparison with the NumPy reference
//! (`tests/reference/speed.py`, `./dev speed`). Prints JSON on standard output.
//!
//! ```text
//! timing eval <reps> design.json...                    median evaluate time and numbers per design
//! timing sim <design.json> <cycles> <substeps> <seeds> one run per seed: cycles/s and ADEV points
//! timing ramsey <design.json>                          the simulation bench's single-ion Ramsey design
//! ```
//! `eval` times `reps` batches (0: no timing, the numbers only) of full evaluations (default options) after a warm-up and
//! prints, per design, the median, 10th and 90th percentile of the time of one evaluation
//! and the evaluation itself. `sim` runs the cycle-by-cycle simulation once per seed
//! (comma-separated) with the given recorded cycles and sub-steps per pulse, no settling
//! beyond the default, and prints the rate (cycles per second of the whole `advance`, one
//! thread) and the simulated Allan deviation at octave averaging times with its EDF.
//! `ramsey` turns a design into the bench's Ramsey design (the dead segments before the
//! probe, then pi/2 pulses of 5 ms around 150 ms of free evolution, then detection), as
//! `core/benches/simulate.rs` does. Errors go to standard error, exit code 2.

use clockwright_core::design::{DeadLabel, Design, Segment};
use clockwright_core::sequence::Preset;
use clockwright_core::simulate::{SimOptions, Simulation};
use clockwright_core::{evaluate, EvalOptions};
use serde_json::{json, Value};
use std::hint::black_box;
use std::process::ExitCode;
use std::time::Instant;

/// Most runs of one `sim` call.
const MAX_SEEDS: usize = 1000;

fn load(path: &str) -> Result<Design, String> {
    let text = std::fs::read_to_string(path).map_err(|e| format!("{path}: {e}"))?;
    Design::from_json(&text).map_err(|e| format!("{path}: {e}"))
}

fn quantiles(mut v: Vec<f64>) -> (f64, f64, f64) {
    v.sort_by(|a, b| a.total_cmp(b));
    let q = |p: f64| v[((v.len() - 1) as f64 * p).round() as usize];
    (q(0.5), q(0.1), q(0.9))
}

fn eval(reps: usize, paths: &[String]) -> Result<Value, String> {
    let opts = EvalOptions::default();
    let mut out = Vec::new();
    for path in paths {
        let d = load(path)?;
        let e = evaluate(&d, &opts).map_err(|e| e.to_string())?;
        if reps == 0 {
            // Numbers only (the agreement check of `./dev test`).
            out.push(json!({ "file": path, "name": d.name, "median_s": null, "evaluation": e }));
            continue;
        }
        // Batches long enough to be well above the clock's resolution.
        let t0 = Instant::now();
        let mut warm = 0;
        while t0.elapsed().as_secs_f64() < 0.2 || warm < 5 {
            black_box(evaluate(black_box(&d), &opts).map_err(|e| e.to_string())?);
            warm += 1;
        }
        let per_batch = ((0.02 / (t0.elapsed().as_secs_f64() / warm as f64)).ceil() as usize).max(1);
        let mut samples = Vec::with_capacity(reps);
        for _ in 0..reps {
            let t = Instant::now();
            for _ in 0..per_batch {
                black_box(evaluate(black_box(&d), &opts).map_err(|e| e.to_string())?);
            }
            samples.push(t.elapsed().as_secs_f64() / per_batch as f64);
        }
        let (median, p10, p90) = quantiles(samples);
        out.push(json!({ "file": path, "name": d.name, "median_s": median, "p10_s": p10, "p90_s": p90, "evaluation": e }));
    }
    Ok(Value::Array(out))
}

fn ramsey(d: &Design) -> Result<Design, String> {
    let mut r = d.clone();
    r.name = format!("{}, Ramsey 5 ms + 150 ms + 5 ms", d.name);
    let probe = Preset::Ramsey { pulse_s: 0.005, free_s: 0.15 }.segments();
    let dead: Vec<Segment> = d.sequence.segments.iter().filter(|s| !matches!(s, Segment::Pulse { .. } | Segment::Free { .. })).cloned().collect();
    let (before, after): (Vec<Segment>, Vec<Segment>) = dead.into_iter().partition(|s| !matches!(s, Segment::Dead { label: DeadLabel::Detection, .. }));
    r.sequence.segments = before.into_iter().chain(probe).chain(after).collect();
    r.validate().map_err(|e| e.to_string())?;
    Ok(r)
}

fn sim(path: &str, cycles: u64, substeps: u32, seeds: &str) -> Result<Value, String> {
    let d = load(path)?;
    let mut runs = Vec::new();
    if seeds.split(',').count() > MAX_SEEDS {
        return Err(format!("at most {MAX_SEEDS} seeds"));
    }
    for seed in seeds.split(',') {
        let seed: u64 = seed.trim().parse().map_err(|_| format!("seed {seed:?} is not a whole number"))?;
        let o = SimOptions { cycles, seed, pulse_substeps: substeps, ..Default::default() };
        let mut s = Simulation::new(&d, &o).map_err(|e| e.to_string())?;
        let t = Instant::now();
        let p = s.advance(u64::MAX);
        let dt = t.elapsed().as_secs_f64();
        let r = s.finish().map_err(|e| e.to_string())?;
        let points: Vec<Value> = r.locked.points.iter().map(|q| json!({ "m": q.m, "tau_s": q.tau_s, "deviation": q.deviation, "edf": q.edf })).collect();
        runs.push(json!({ "seed": seed, "cycles_run": p.cycles_done, "seconds": dt, "cycles_per_s": p.cycles_done as f64 / dt, "settle_cycles": r.settle_cycles, "locked": points, "analytic": r.analytic }));
    }
    Ok(json!({ "name": d.name, "cycles": cycles, "substeps": substeps, "runs": runs }))
}

fn run() -> Result<Value, String> {
    let args: Vec<String> = std::env::args().skip(1).collect();
    let usage = "usage: timing eval <reps> design.json... | timing sim <design.json> <cycles> <substeps> <seeds> | timing ramsey <design.json>";
    match args.first().map(String::as_str) {
        Some("eval") if args.len() >= 3 => {
            let reps: usize = args[1].parse().map_err(|_| format!("reps {:?} is not a whole number", args[1]))?;
            eval(reps.min(10_000), &args[2..])
        }
        Some("sim") if args.len() == 5 => {
            let cycles: u64 = args[2].parse().map_err(|_| format!("cycles {:?} is not a whole number", args[2]))?;
            let substeps: u32 = args[3].parse().map_err(|_| format!("substeps {:?} is not a whole number", args[3]))?;
            sim(&args[1], cycles, substeps, &args[4])
        }
        Some("ramsey") if args.len() == 2 => serde_json::to_value(ramsey(&load(&args[1])?)?).map_err(|e| e.to_string()),
        _ => Err(usage.into()),
    }
}

fn main() -> ExitCode {
    match run() {
        Ok(v) => {
            println!("{v}");
            ExitCode::SUCCESS
        }
        Err(e) => {
            eprintln!("{e}");
            ExitCode::from(2)
        }
    }
}
