//! Benchmark of the cycle-by-cycle simulation: simulated interrogation cycles per second,
//! one thread, for a single-ion Ramsey design (the single-ion demo with a Ramsey probe of
//! two 5 ms pi/2 pulses around 150 ms of free evolution, its cryogenic-cavity laser with
//! white, flicker and random-walk FM, decay of the excited state on), and for the four demo
//! designs as they are. Target: at least 2e6 cycles per second for the single-ion Ramsey
//! design.
//!
//! Run: `cargo bench -p clockwright-core --bench simulate`

use clockwright_core::demo;
use clockwright_core::design::{Design, Segment};
use clockwright_core::sequence::Preset;
use clockwright_core::simulate::{SimOptions, Simulation};
use std::time::Instant;

fn rate(d: &Design, substeps: u32) -> f64 {
    let cycles = 1_000_000u64;
    let o = SimOptions { cycles, settle_cycles: Some(0), pulse_substeps: substeps, ..Default::default() };
    let mut best: f64 = 0.0;
    for _ in 0..3 {
        let mut s = Simulation::new(d, &o).unwrap();
        let t0 = Instant::now();
        let p = s.advance(cycles);
        let dt = t0.elapsed().as_secs_f64();
        assert!(p.finished);
        best = best.max(cycles as f64 / dt);
    }
    best
}

fn main() {
    let mut ramsey = demo::designs()[0].clone();
    ramsey.name = "single ion, Ramsey 5 ms + 150 ms + 5 ms".into();
    let probe = Preset::Ramsey { pulse_s: 0.005, free_s: 0.15 }.segments();
    let segs: Vec<Segment> = ramsey.sequence.segments.iter().filter(|s| !matches!(s, Segment::Pulse { .. })).cloned().collect();
    // Dead segments before the probe (cooling, preparation), then the probe, then detection.
    let (before, after): (Vec<Segment>, Vec<Segment>) = segs.into_iter().partition(|s| !matches!(s, Segment::Dead { label: clockwright_core::design::DeadLabel::Detection, .. }));
    ramsey.sequence.segments = before.into_iter().chain(probe).chain(after).collect();
    ramsey.validate().unwrap();
    println!("simulated interrogation cycles per second, one thread (best of 3 runs of 1e6 cycles)");
    for subs in [1, 4] {
        println!("{:<46} {} sub-step(s) per pulse: {:>10.3e} cycles/s", ramsey.name, subs, rate(&ramsey, subs));
    }
    for d in demo::designs() {
        println!("{:<46} 4 sub-steps per pulse:     {:>10.3e} cycles/s", d.name, rate(&d, 4));
    }
}
