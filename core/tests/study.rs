//! Trade-off studies: optimum probe time, sweeps and maps with contours, uncertainty bands.

mod common;
use clockwright_core::design::*;
use clockwright_core::noise::NoiseTerm;
use clockwright_core::study::bands::{normal_cdf, normal_quantile, quantile_sorted, Distribution, Sampling, Uncertain};
use clockwright_core::study::contour::{auto_levels, marching_squares, Grid};
use clockwright_core::study::optimum::{OptimumMechanism, ProbeScaling, ProbeShape, RangeEnd};
use clockwright_core::study::sweep::{Axis, Spacing};
use clockwright_core::study::*;
use clockwright_core::budget::{evaluate_with_cache, StageCache};
use clockwright_core::{demo, evaluate, EvalOptions};
use common::*;
use std::f64::consts::PI;

// ---------------------------------------------------------------------------------------
// Optimum probe time.
// ---------------------------------------------------------------------------------------

fn random_design(rng: &mut Rng) -> Design {
    let ramsey = rng.uniform(0.0, 1.0) < 0.5;
    let t = rng.log_uniform(0.01, 0.5);
    let segs = if ramsey {
        let tp = rng.log_uniform(1e-4, 5e-3);
        vec![pulse(tp, 0.5), Segment::Free { duration_s: t }, pulse(tp, 0.5)]
    } else {
        vec![pulse(t, 1.0)]
    };
    let mut terms = vec![NoiseTerm::WhiteFrequency { sigma_y_1s: rng.log_uniform(1e-17, 1e-15) }, NoiseTerm::FlickerFloor { sigma_y: rng.log_uniform(1e-17, 1e-15) }];
    if rng.uniform(0.0, 1.0) < 0.5 {
        terms.push(NoiseTerm::RandomWalk { sigma_y_1s: rng.log_uniform(1e-19, 1e-17) });
    }
    let mut d = design(rng.log_uniform(1e14, 2e15), rng.log_uniform(1.0, 1e4) as u64, segs, rng.log_uniform(1e-3, 0.5), laser(terms));
    if rng.uniform(0.0, 1.0) < 0.5 {
        d.transition.lifetime_s = Some(rng.log_uniform(0.1, 10.0));
    }
    d.lock.attack_time_s = rng.log_uniform(2.0, 20.0);
    d
}

/// sigma_y at tau of `d` with probe time `t` and `rounds` rounds, or infinity without a value.
fn sigma_at(d: &Design, t: f64, rounds: u32, tau: f64, attack_cycles: Option<f64>) -> f64 {
    let changed = ProbeScaling::of(d).apply(d, t, rounds, attack_cycles);
    Output::SigmaAt { tau_s: tau }.evaluate(&changed, &mut StageCache::default()).unwrap_or(f64::INFINITY)
}

/// Slow twin of the optimum: a brute-force scan of 1500 log-spaced probe times over the same
/// range. The search must be at least as good as every scanned point and within the scan's
/// resolution of its best (common practice for checking a minimiser).
#[test]
fn optimum_agrees_with_a_fine_brute_force_scan() {
    let mut rng = Rng(0x5EED_0001);
    for case in 0..10 {
        let d = random_design(&mut rng);
        let tau = rng.log_uniform(100.0, 1e4);
        let mut req = OptimumRequest::at(tau);
        req.probe_max_s = 10.0;
        req.respect_coherence = rng.uniform(0.0, 1.0) < 0.5;
        if rng.uniform(0.0, 1.0) < 0.5 {
            req.attack_cycles = Some(rng.uniform(5.0, 50.0));
        }
        let o = optimum(&d, &req).unwrap();
        let [lo, hi] = o.range_s;
        let n = 1500;
        let mut best = (f64::INFINITY, 0.0);
        for k in 0..n {
            let t = lo * (hi / lo).powf(k as f64 / (n - 1) as f64);
            let s = sigma_at(&d, t, d.detection.rounds, tau, req.attack_cycles);
            if s < best.0 {
                best = (s, t);
            }
        }
        assert!(best.0.is_finite(), "case {case}: the scan found no value");
        assert!(o.sigma <= best.0 * (1.0 + 1e-9), "case {case}: optimum {} at {} s, scan {} at {} s", o.sigma, o.probe_time_s, best.0, best.1);
        assert!(o.sigma >= best.0 * (1.0 - 1e-3), "case {case}: optimum {} far below the scan {}", o.sigma, best.0);
        // The reported optimum is what evaluating its design gives.
        let again = Output::SigmaAt { tau_s: tau }.evaluate(&o.design, &mut StageCache::default()).unwrap();
        assert!(rel(again, o.sigma) < 1e-12, "case {case}: {again} vs {}", o.sigma);
        assert!(o.sigma.is_finite() && o.laser.is_finite() && o.projection.is_finite() && o.dick.is_finite());
        assert!(rel((o.laser.powi(2) + o.projection.powi(2) + o.dick.powi(2)).sqrt(), o.sigma) < 1e-9);
    }
}

/// Slow twin of the rounds scan: every number of rounds from 1 to 6, each by a 300-point scan.
#[test]
fn optimum_over_detection_rounds_agrees_with_brute_force() {
    let d = demo::designs()[0].clone();
    let tau = 1000.0;
    let mut req = OptimumRequest::at(tau);
    req.max_rounds = Some(6);
    req.probe_max_s = 1.0;
    let o = optimum(&d, &req).unwrap();
    assert_eq!(o.per_rounds.len(), 6);
    let mut best = (f64::INFINITY, 0u32);
    for r in 1..=6u32 {
        let mut dr = d.clone();
        dr.detection.rounds = r;
        let fixed = dr.cycle_time_s() - 0.15;
        let hi = 1.0f64.min(o.coherence_probe_limit_s.unwrap_or(1e9)).min((d.lock.attack_time_s - fixed) * (1.0 - 1e-9));
        let lo = 1e-3;
        for k in 0..300 {
            let t = lo * (hi / lo).powf(k as f64 / 299.0);
            let s = sigma_at(&d, t, r, tau, None);
            if s < best.0 {
                best = (s, r);
            }
        }
    }
    assert!(o.sigma <= best.0 * (1.0 + 1e-9), "optimum {} with {} rounds, scan {} with {} rounds", o.sigma, o.rounds, best.0, best.1);
    assert_eq!(o.rounds, best.1);
}

fn ramsey_white(nu0: f64, n: u64, sigma_1s: f64) -> Design {
    // Pulses of 1 ns and 1 us of dead time: the ideal Ramsey limit with negligible dead time.
    let mut d = design(nu0, n, vec![pulse(1e-9, 0.5), Segment::Free { duration_s: 0.1 }, pulse(1e-9, 0.5)], 1e-6, white_laser(sigma_1s));
    d.lock.attack_time_s = 50.0;
    d
}

/// Ramsey with white laser noise and negligible dead time: the projection-noise limit
/// sigma = 1/(2 pi nu0 T_R) sqrt(T_c/(N tau)) (Rev. Mod. Phys. 87, 637 (2015)) falls with
/// T_R, so the optimum runs to the longest allowed free-evolution time, and is labelled so.
#[test]
fn ramsey_with_white_laser_noise_runs_to_the_longest_probe() {
    let (nu0, n, s1) = (4.29e14, 10u64, 3e-16);
    let d = ramsey_white(nu0, n, s1);
    let mut req = OptimumRequest::at(1e4);
    req.respect_coherence = false;
    req.probe_max_s = 5.0;
    let o = optimum(&d, &req).unwrap();
    assert_eq!(o.probe_shape, ProbeShape::RamseyFreeTime);
    assert_eq!(o.range_end, RangeEnd::Requested);
    assert!(o.at_range_end && rel(o.probe_time_s, 5.0) < 1e-9, "{}", o.probe_time_s);
    assert_eq!(o.mechanism, OptimumMechanism::ProjectionNoise, "{}", o.explanation);
    // The trend follows the closed form at every scanned probe time.
    for p in o.scan.iter().step_by(4) {
        let changed = ProbeScaling::of(&d).apply(&d, p.probe_time_s, 1, None);
        let e = evaluate(&changed, &EvalOptions::default()).unwrap();
        // The two 1-ns pi/2 pulses add 4 t_p / pi to the effective Ramsey time (from memory).
        let t_r = p.probe_time_s + 4e-9 / PI;
        let closed = 1.0 / (2.0 * PI * nu0 * t_r) * (e.cycle_time_s / n as f64).sqrt();
        assert!(rel(e.projection.sigma_1s, closed) < 1e-7, "T {}: {} vs {closed}", p.probe_time_s, e.projection.sigma_1s);
    }
    // sigma at tau falls along the whole scan.
    let s: Vec<f64> = o.scan.iter().map(|p| p.sigma.unwrap()).collect();
    assert!(s.windows(2).all(|w| w[1] < w[0]), "{s:?}");
}

/// The same design with the coherence limit respected: the optimum is the probe time at
/// which the free laser's RMS phase 2 pi nu0 T sqrt(2) sigma_y(T) reaches 1 rad (common
/// practice), which for white frequency noise (sigma_y(T)^2 = sigma_1s^2 / T, IEEE Std
/// 1139-2008) is T = 1 / (2 (2 pi nu0 sigma_1s)^2); the free time is that less the pulses.
#[test]
fn ramsey_optimum_stops_at_the_laser_coherence_limit() {
    let (nu0, s1) = (4.29e14, 3e-16);
    let d = ramsey_white(nu0, 10, s1);
    let mut req = OptimumRequest::at(1e4);
    req.probe_max_s = 5.0;
    let o = optimum(&d, &req).unwrap();
    let t_coh = 1.0 / (2.0 * (2.0 * PI * nu0 * s1).powi(2));
    assert_eq!(o.range_end, RangeEnd::LaserCoherence);
    assert_eq!(o.mechanism, OptimumMechanism::LaserCoherence);
    assert!(rel(o.probe_time_s, t_coh - 2e-9) < 1e-6, "{} vs {t_coh}", o.probe_time_s);
    assert!((o.probe_phase_rms_rad - 1.0).abs() < 1e-5, "{}", o.probe_phase_rms_rad);
}

/// With a short excited-state lifetime and a quiet laser the optimum lies inside the range,
/// set by decay (common practice: of the order of the lifetime), and a scan on both sides
/// is higher.
#[test]
fn lifetime_sets_an_interior_optimum() {
    let mut d = ramsey_white(4.29e14, 10, 1e-19);
    d.transition.lifetime_s = Some(0.3);
    let mut req = OptimumRequest::at(1e4);
    req.probe_max_s = 20.0;
    let o = optimum(&d, &req).unwrap();
    assert!(!o.at_range_end, "{o:?}");
    assert_eq!(o.mechanism, OptimumMechanism::Lifetime, "{}", o.explanation);
    assert!(o.probe_time_s > 0.03 && o.probe_time_s < 3.0, "{}", o.probe_time_s);
    for f in [0.8, 1.25] {
        assert!(sigma_at(&d, o.probe_time_s * f, 1, 1e4, None) > o.sigma);
    }
}

/// Rabi designs scale the pulse at fixed area; dead time stays fixed.
#[test]
fn rabi_probe_time_scales_the_pulse_at_fixed_area() {
    let d = demo::designs()[0].clone();
    let s = ProbeScaling::of(&d);
    assert_eq!(s.shape, ProbeShape::RabiPulseTime);
    assert_eq!(s.probe_time_s, 0.15);
    let c = s.apply(&d, 0.6, 3, None);
    assert_eq!(c.sequence.segments[2], Segment::Pulse { duration_s: 0.6, area_pi: 1.0, phase_deg: 0.0, detuning_offset_hz: 0.0 });
    assert!(rel(c.cycle_time_s() - d.cycle_time_s(), 0.45) < 1e-12);
    // Hyper-Ramsey: only the free segment scales.
    let h = demo::designs()[3].clone();
    let s = ProbeScaling::of(&h);
    assert_eq!(s.shape, ProbeShape::RamseyFreeTime);
    let c = s.apply(&h, 2.0 * s.probe_time_s, h.detection.rounds, None);
    assert!(rel(c.cycle_time_s() - h.cycle_time_s(), s.probe_time_s) < 1e-12);
}

#[test]
fn optimum_refuses_bad_requests_with_the_field_named() {
    let d = demo::designs()[0].clone();
    let mut req = OptimumRequest::at(-1.0);
    req.probe_max_s = 1e-4;
    req.max_rounds = Some(500);
    let e = optimum(&d, &req).unwrap_err();
    let paths: Vec<&str> = e.problems.iter().map(|p| p.path.as_str()).collect();
    assert!(paths.contains(&"tau_s") && paths.contains(&"probe_max_s") && paths.contains(&"max_rounds"), "{e}");
    // tau shorter than every cycle: no probe time is valid.
    let e = optimum(&d, &OptimumRequest::at(0.01)).unwrap_err();
    assert!(e.to_string().contains("no probe time"), "{e}");
}

// ---------------------------------------------------------------------------------------
// Sweeps and maps.
// ---------------------------------------------------------------------------------------

fn axis(path: &str, from: f64, to: f64, points: usize, spacing: Spacing) -> Axis {
    Axis { path: path.into(), from, to, points, spacing }
}

/// A sweep of the atom count reproduces the Ramsey projection limit
/// 1/(2 pi nu0 T_R) sqrt(T_c/N) (Phys. Rev. A 47, 3554 (1993)) at every point.
#[test]
fn atom_count_sweep_follows_the_projection_limit() {
    let (nu0, tr) = (4.29e14, 0.4);
    let mut d = ramsey_white(nu0, 1, 1e-16);
    d.sequence.segments[2] = Segment::Free { duration_s: tr };
    let req = GridRequest { x: axis("atoms.count", 1.0, 20.0, 20, Spacing::Linear), y: None, output: Output::Projection1s, levels: None };
    let r = sweep(&[d.clone()], &req).unwrap();
    assert_eq!(r.x, (1..=20).map(|n| n as f64).collect::<Vec<_>>());
    let tc = d.cycle_time_s();
    for (n, v) in r.x.iter().zip(&r.series[0].values) {
        let closed = 1.0 / (2.0 * PI * nu0 * tr) * (tc / n).sqrt();
        assert!(rel(v.unwrap(), closed) < 1e-6, "N {n}: {v:?} vs {closed}");
    }
    // Nine points from 1 to 3 round to repeated whole numbers; each repeat reuses the
    // evaluation of its twin and must equal evaluating that count directly.
    let req = GridRequest { x: axis("atoms.count", 1.0, 3.0, 9, Spacing::Linear), ..req };
    let r = sweep(&[d.clone()], &req).unwrap();
    assert_eq!(r.x, vec![1.0, 1.0, 2.0, 2.0, 2.0, 2.0, 3.0, 3.0, 3.0]);
    for (n, v) in r.x.iter().zip(&r.series[0].values) {
        let mut dn = d.clone();
        dn.atoms.count = *n as u64;
        assert_eq!(*v, Output::Projection1s.evaluate(&dn, &mut StageCache::default()).ok());
    }
}

fn set_field(d: &mut Design, path: &str, x: f64) {
    match path {
        "sequence.segments[2].duration_s" => match &mut d.sequence.segments[2] {
            Segment::Pulse { duration_s, .. } | Segment::Free { duration_s } | Segment::Dead { duration_s, .. } => *duration_s = x,
        },
        "laser.noise[0].sigma_y_1s" => d.laser.noise[0] = NoiseTerm::WhiteFrequency { sigma_y_1s: x },
        "lock.attack_time_s" => d.lock.attack_time_s = x,
        "detection.rounds" => d.detection.rounds = x.round() as u32,
        "atoms.count" => d.atoms.count = x.round() as u64,
        _ => panic!("no twin for {path}"),
    }
}

/// Slow twin of path addressing: every sweep value equals evaluating a design changed by
/// hand, field by field, for several designs at once, on random axes.
#[test]
fn sweep_values_equal_designs_changed_by_hand() {
    let designs = demo::designs();
    let mut rng = Rng(0x5EED_0002);
    let cases = [
        ("sequence.segments[2].duration_s", 0.002, 0.4, Spacing::Log),
        ("laser.noise[0].sigma_y_1s", 1e-17, 1e-15, Spacing::Log),
        ("lock.attack_time_s", 2.0, 30.0, Spacing::Linear),
        ("detection.rounds", 1.0, 9.0, Spacing::Linear),
    ];
    for (path, a, b, spacing) in cases {
        let (from, to) = (rng.uniform(a, (a + b) / 2.0), rng.uniform((a + b) / 2.0, b));
        let output = [Output::SigmaAt { tau_s: 1000.0 }, Output::Sigma1sEquivalent, Output::DickShare, Output::TimeToTarget { target: 1e-17 }][rng.next_u64() as usize % 4];
        let req = GridRequest { x: axis(path, from, to, 5, spacing), y: None, output, levels: None };
        let r = sweep(&designs, &req).unwrap();
        assert_eq!(r.series.len(), designs.len());
        for (d, s) in designs.iter().zip(&r.series) {
            for (i, &x) in r.x.iter().enumerate() {
                let mut changed = d.clone();
                set_field(&mut changed, path, x);
                let direct = output.evaluate(&changed, &mut StageCache::default()).ok();
                assert_eq!(s.values[i], direct, "{path} = {x} in {}", d.name);
                assert_eq!(s.values[i].is_none(), s.holes.iter().any(|h| h.index == i));
            }
        }
    }
}

#[test]
fn invalid_points_are_holes_with_reasons_never_nan() {
    let d = demo::designs()[0].clone();
    // Durations through zero into negative values.
    let req = GridRequest { x: axis("sequence.segments[0].duration_s", -0.02, 0.04, 7, Spacing::Linear), y: None, output: Output::Sigma1sEquivalent, levels: None };
    let r = sweep(&[d.clone()], &req).unwrap();
    let s = &r.series[0];
    assert_eq!(s.holes.len(), 3, "{:?}", s.holes);
    for h in &s.holes {
        assert!(s.values[h.index].is_none());
        assert!(h.reason.contains("sequence.segments[0].duration_s"), "{}", h.reason);
    }
    let text = serde_json::to_string(&r).unwrap();
    assert!(!text.contains("NaN") && !text.contains("inf"), "{text}");
    // Ends near the largest numbers: the axis stays finite and the points are holes.
    let req = GridRequest { x: axis("lock.attack_time_s", -1e300, 1e300, 3, Spacing::Linear), y: None, output: Output::Sigma1sEquivalent, levels: None };
    let r = sweep(&[demo::designs()[0].clone()], &req).unwrap();
    assert_eq!(r.x, vec![-1e300, 0.0, 1e300]);
    assert_eq!(r.series[0].holes.len(), 3);
    // A target never reached is a hole with the reason.
    let req = GridRequest { x: axis("laser.noise[0].sigma_y_1s", 1e-17, 1e-14, 4, Spacing::Log), y: None, output: Output::TimeToTarget { target: 1e-19 }, levels: None };
    let r = sweep(&[d], &req).unwrap();
    assert!(r.series[0].holes.iter().any(|h| h.reason.contains("not reached")), "{:?}", r.series[0].holes);
}

#[test]
fn bad_paths_and_oversized_grids_are_named() {
    let designs = demo::designs();
    let mk = |path: &str, points: usize| GridRequest { x: axis(path, 1.0, 2.0, points, Spacing::Linear), y: None, output: Output::Sigma1sEquivalent, levels: None };
    let e = sweep(&designs, &mk("sequence.segments[5].duration_s", 5)).unwrap_err();
    assert_eq!(e.problems[0].path, "x.path");
    assert!(e.to_string().contains("designs[0] has no such field"), "{e}");
    let e = sweep(&designs, &mk("name", 5)).unwrap_err();
    assert!(e.to_string().contains("the text"), "{e}");
    let e = sweep(&designs, &mk("laser", 5)).unwrap_err();
    assert!(e.to_string().contains("group of fields"), "{e}");
    let e = sweep(&designs, &mk("atoms..count", 5)).unwrap_err();
    assert!(e.to_string().contains("field name is missing"), "{e}");
    let e = sweep(&designs, &mk("laser.noise[x].sigma_y", 5)).unwrap_err();
    assert!(e.to_string().contains("index"), "{e}");
    let mut big = mk("atoms.count", 1000);
    big.y = Some(axis("lock.attack_time_s", 5.0, 6.0, 1000, Spacing::Linear));
    let e = map(&designs, &big).err().expect("a million evaluations must be refused");
    assert_eq!(e.problems[0].path, "y.points");
    assert!(e.to_string().contains("at most 100000 evaluations"), "{e}");
    let mut log = mk("atoms.count", 5);
    log.x.spacing = Spacing::Log;
    log.x.from = -1.0;
    assert_eq!(sweep(&designs, &log).unwrap_err().problems[0].path, "x.from");
    assert_eq!(map(&designs, &mk("atoms.count", 5)).unwrap_err().problems[0].path, "y");
}

/// A map run in chunks gives the same result as in one call, and reports its progress.
#[test]
fn chunked_map_matches_one_call_and_reports_progress() {
    let designs = demo::designs()[..2].to_vec();
    let req = GridRequest {
        x: axis("atoms.count", 1.0, 6.0, 6, Spacing::Linear),
        y: Some(axis("sequence.segments[2].duration_s", 0.003, 0.3, 5, Spacing::Log)),
        output: Output::SigmaAt { tau_s: 1000.0 },
        levels: None,
    };
    let whole = map(&designs, &req).unwrap();
    let mut run = GridRun::new(&designs, &req).unwrap();
    assert_eq!(run.total(), 60);
    assert!(run.result().is_err());
    let mut last = 0;
    while !run.is_finished() {
        let p = run.advance(7);
        assert!(p.done > last && p.done <= p.total);
        last = p.done;
    }
    assert_eq!(run.result().unwrap(), whole);
    // Row by row: values[iy * nx + ix] is the design with x[ix] and y[iy].
    let mut d = designs[1].clone();
    d.atoms.count = 4;
    set_field(&mut d, "sequence.segments[2].duration_s", whole.y[3]);
    assert_eq!(whole.series[1].values[3 * 6 + 3], Output::SigmaAt { tau_s: 1000.0 }.evaluate(&d, &mut StageCache::default()).ok());
    assert!(whole.series.iter().all(|s| s.contours.iter().any(|c| !c.segments.is_empty())));
}

// ---------------------------------------------------------------------------------------
// Contours.
// ---------------------------------------------------------------------------------------

/// Slow twin of marching squares: every grid edge is checked on its own, its crossing found
/// by bisection of the linear interpolant; each crossing must be the end of exactly one
/// segment in each complete cell that holds the edge, and there must be no other ends.
#[test]
fn marching_squares_matches_edge_by_edge_bisection() {
    let mut rng = Rng(0x5EED_0003);
    for case in 0..40 {
        let (nx, ny) = (3 + rng.next_u64() as usize % 9, 3 + rng.next_u64() as usize % 9);
        let log_x = rng.uniform(0.0, 1.0) < 0.5;
        let xs: Vec<f64> = (0..nx).map(|i| if log_x { 10f64.powf(i as f64 / 3.0) } else { i as f64 * 0.7 - 1.0 }).collect();
        let ys: Vec<f64> = (0..ny).map(|i| 2.0 + i as f64 * 0.3).collect();
        let values: Vec<Option<f64>> = (0..nx * ny).map(|_| if rng.uniform(0.0, 1.0) < 0.1 { None } else { Some(rng.log_uniform(1e-3, 1e3)) }).collect();
        let grid = Grid { xs: &xs, ys: &ys, values: &values, log_values: true, log_x, log_y: false };
        let levels = [rng.log_uniform(1e-2, 1e2), rng.log_uniform(1e-2, 1e2)];
        let lines = marching_squares(&grid, &levels);
        let t = |ix: usize, iy: usize| values[iy * nx + ix].map(|v| v.log10());
        let complete = |cx: isize, cy: isize| {
            cx >= 0 && cy >= 0 && (cx as usize) < nx - 1 && (cy as usize) < ny - 1 && {
                let (cx, cy) = (cx as usize, cy as usize);
                t(cx, cy).is_some() && t(cx + 1, cy).is_some() && t(cx, cy + 1).is_some() && t(cx + 1, cy + 1).is_some()
            }
        };
        for (line, &level) in lines.iter().zip(&levels) {
            let l = level.log10();
            let ends: Vec<[f64; 2]> = line.segments.iter().flat_map(|s| [[s[0], s[1]], [s[2], s[3]]]).collect();
            let mut expected = 0;
            // Horizontal edges (ix, iy)-(ix+1, iy) lie in cells (ix, iy-1) and (ix, iy).
            for iy in 0..ny {
                for ix in 0..nx {
                    for horizontal in [true, false] {
                        let (jx, jy) = if horizontal { (ix + 1, iy) } else { (ix, iy + 1) };
                        if jx >= nx || jy >= ny {
                            continue;
                        }
                        let (Some(ta), Some(tb)) = (t(ix, iy), t(jx, jy)) else { continue };
                        if (ta >= l) == (tb >= l) {
                            continue;
                        }
                        let (mut a, mut b) = (0.0f64, 1.0f64);
                        for _ in 0..200 {
                            let m = (a + b) / 2.0;
                            if ((ta + (tb - ta) * m) >= l) == (ta >= l) { a = m } else { b = m }
                        }
                        let s = (a + b) / 2.0;
                        let p = if horizontal {
                            let x = if log_x { (xs[ix].ln() + (xs[jx].ln() - xs[ix].ln()) * s).exp() } else { xs[ix] + (xs[jx] - xs[ix]) * s };
                            [x, ys[iy]]
                        } else {
                            [xs[ix], ys[iy] + (ys[jy] - ys[iy]) * s]
                        };
                        let cells = if horizontal { [(ix as isize, iy as isize - 1), (ix as isize, iy as isize)] } else { [(ix as isize - 1, iy as isize), (ix as isize, iy as isize)] };
                        let mult = cells.iter().filter(|&&(cx, cy)| complete(cx, cy)).count();
                        let found = ends.iter().filter(|e| (e[0] - p[0]).abs() <= 1e-9 * (1.0 + p[0].abs()) && (e[1] - p[1]).abs() <= 1e-9 * (1.0 + p[1].abs())).count();
                        assert_eq!(found, mult, "case {case}: crossing at {p:?}");
                        expected += mult;
                    }
                }
            }
            assert_eq!(ends.len(), expected, "case {case}: stray segment ends");
        }
    }
}

/// Closed forms: on log axes with log values, f = x y is linear in (ln x, ln y), so every
/// contour point lies exactly on x y = level; f = x^2 + y^2 on linear axes gives circles
/// to within the interpolation error h^2/8 of the grid step h.
#[test]
fn contours_of_closed_forms() {
    let xs: Vec<f64> = (0..9).map(|i| 10f64.powf(i as f64 / 4.0)).collect();
    let ys: Vec<f64> = (0..7).map(|i| 10f64.powf(i as f64 / 3.0)).collect();
    let values: Vec<Option<f64>> = ys.iter().flat_map(|y| xs.iter().map(move |x| Some(x * y))).collect();
    let grid = Grid { xs: &xs, ys: &ys, values: &values, log_values: true, log_x: true, log_y: true };
    for line in marching_squares(&grid, &[10.0, 300.0, 2000.0]) {
        assert!(!line.segments.is_empty());
        for s in &line.segments {
            assert!(rel(s[0] * s[1], line.level) < 1e-12 && rel(s[2] * s[3], line.level) < 1e-12, "{s:?} at {}", line.level);
        }
    }
    let h = 0.05;
    let g: Vec<f64> = (0..61).map(|i| -1.5 + h * i as f64).collect();
    let values: Vec<Option<f64>> = g.iter().flat_map(|y| g.iter().map(move |x| Some(x * x + y * y))).collect();
    let grid = Grid { xs: &g, ys: &g, values: &values, log_values: false, log_x: false, log_y: false };
    let line = &marching_squares(&grid, &[1.0])[0];
    assert!(line.segments.len() > 100);
    for s in &line.segments {
        for (x, y) in [(s[0], s[1]), (s[2], s[3])] {
            assert!(((x * x + y * y) - 1.0).abs() <= h * h / 4.0 + 1e-12, "({x}, {y})");
        }
    }
}

/// A saddle cell is split according to the mean of its corners.
#[test]
fn saddle_cells_follow_the_centre_value() {
    let xs = [0.0, 1.0];
    let ys = [0.0, 1.0];
    // Corners 00 and 11 high, 10 and 01 low; centre 0.55 (high) or 0.45 (low) against level 0.5.
    for (hi, centre_high) in [(1.0, true), (0.8, false)] {
        let values = [Some(hi), Some(0.1), Some(0.1), Some(hi)];
        let lines = marching_squares(&Grid { xs: &xs, ys: &ys, values: &values, log_values: false, log_x: false, log_y: false }, &[0.5]);
        let segs = &lines[0].segments;
        assert_eq!(segs.len(), 2);
        // When the centre is high, each segment cuts off a low corner (10 or 01).
        let cut_off_low = segs.iter().all(|s| {
            let (mx, my) = ((s[0] + s[2]) / 2.0, (s[1] + s[3]) / 2.0);
            (mx > 0.5 && my < 0.5) || (mx < 0.5 && my > 0.5)
        });
        assert_eq!(cut_off_low, centre_high, "{segs:?}");
    }
}

#[test]
fn automatic_levels_are_round_and_inside_the_values() {
    let v: Vec<Option<f64>> = [3e-18, 4e-17, 2e-16, 7e-16].iter().map(|&x| Some(x)).collect();
    let want = [5e-18, 1e-17, 2e-17, 5e-17, 1e-16, 2e-16, 5e-16];
    let got = auto_levels(&v, true);
    assert_eq!(got.len(), want.len(), "{got:?}");
    assert!(got.iter().zip(want).all(|(a, b)| rel(*a, b) < 1e-14), "{got:?}");
    // Linear: span 0.87, eight steps of at least 0.109 round up to steps of 0.2.
    let v = [Some(0.03), Some(0.41), None, Some(0.9)];
    let l = auto_levels(&v, false);
    assert_eq!(l.len(), 4, "{l:?}");
    assert!(l.iter().zip([0.2, 0.4, 0.6, 0.8]).all(|(a, b)| (a - b).abs() < 1e-12), "{l:?}");
    let wide: Vec<Option<f64>> = [1e-30, 1e-3].iter().map(|&x| Some(x)).collect();
    assert!(auto_levels(&wide, true).len() <= 12);
}

// ---------------------------------------------------------------------------------------
// Uncertainty bands.
// ---------------------------------------------------------------------------------------

/// The normal quantile against scipy.stats.norm.ppf (SciPy 1.x), to the last digits.
#[test]
fn normal_quantile_matches_scipy() {
    let table = [
        (1e-300, -37.0470962993612),
        (1e-20, -9.262340089798409),
        (1e-10, -6.361340902404056),
        (0.0001, -3.7190164854556804),
        (0.01, -2.3263478740408408),
        (0.16, -0.994457883209753),
        (0.3, -0.5244005127080409),
        (0.5, 0.0),
        (0.7, 0.5244005127080407),
        (0.84, 0.994457883209753),
        (0.975, 1.959963984540054),
        (0.999, 3.090232306167813),
        (0.999999999999, 7.0344869100478356),
    ];
    for (p, x) in table {
        let q = normal_quantile(p);
        assert!((q - x).abs() <= 1e-13 * (1.0 + x.abs()) * 4.0, "p {p}: {q} vs {x}");
    }
    // Round trip through the distribution function on random probabilities.
    let mut rng = Rng(0x5EED_0004);
    for _ in 0..200 {
        let p = rng.uniform(1e-6, 1.0 - 1e-6);
        assert!(rel(normal_cdf(normal_quantile(p)), p) < 1e-12);
    }
}

/// Sample quantiles: numpy.quantile (default method, definition 7) on a fixed set, and a
/// literal twin on random sets.
#[test]
fn sample_quantiles_match_numpy_definition_seven() {
    let mut a: Vec<f64> = vec![3.0, 1.0, 4.0, 1.5, 9.0, 2.6, 5.0];
    a.sort_by(|x, y| x.total_cmp(y));
    for (q, want) in [(0.0, 1.0), (0.1, 1.3), (0.16, 1.48), (0.5, 3.0), (0.84, 5.16), (0.9, 6.600000000000001), (1.0, 9.0)] {
        assert!((quantile_sorted(&a, q).unwrap() - want).abs() < 1e-12, "q {q}");
    }
    let mut rng = Rng(0x5EED_0005);
    for _ in 0..50 {
        let n = 1 + rng.next_u64() as usize % 30;
        let mut v: Vec<f64> = (0..n).map(|_| rng.uniform(-5.0, 5.0)).collect();
        v.sort_by(|x, y| x.total_cmp(y));
        let q = rng.uniform(0.0, 1.0);
        // Literal: the value at rank (n-1) q, between the two neighbouring order statistics.
        let pos = (n - 1) as f64 * q;
        let below = v.iter().enumerate().filter(|(i, _)| (*i as f64) <= pos).last().unwrap();
        let above = v.iter().enumerate().find(|(i, _)| (*i as f64) >= pos).unwrap();
        let want = if below.0 == above.0 { *below.1 } else { below.1 + (pos - below.0 as f64) * (above.1 - below.1) };
        assert!((quantile_sorted(&v, q).unwrap() - want).abs() < 1e-12);
    }
    assert_eq!(quantile_sorted(&[1.0, f64::INFINITY], 0.9), None);
    assert_eq!(quantile_sorted(&[] as &[f64], 0.5), None);
}

/// Latin hypercube: in every field, each of the n probability strata holds exactly one
/// sample (Technometrics 21, 239 (1979)).
#[test]
fn latin_hypercube_uses_each_stratum_once() {
    let d = demo::designs()[1].clone();
    let mut req = BandRequest::new(vec![
        Uncertain { path: "laser.noise[1].sigma_y".into(), distribution: Distribution::Uniform { low: 1e-16, high: 5e-16 } },
        Uncertain { path: "sequence.segments[3].duration_s".into(), distribution: Distribution::Uniform { low: 0.1, high: 0.2 } },
    ]);
    req.samples = 37;
    let run = BandRun::new(&d, &req).unwrap();
    for (j, (lo, hi)) in [(1e-16, 5e-16), (0.1, 0.2)].iter().enumerate() {
        let mut strata: Vec<usize> = run.inputs().iter().map(|row| ((row[j] - lo) / (hi - lo) * 37.0).floor() as usize).collect();
        strata.sort();
        assert_eq!(strata, (0..37).collect::<Vec<_>>(), "field {j}");
    }
}

/// For a monotone output y = f(x) of one input sampled by Latin hypercube, the sample
/// quantile q of y lies between f at the input quantiles q -+ 2/n (each stratum holds one
/// sample, so the k-th order statistic lies in stratum k); `decreasing` swaps the tails.
fn assert_band_follows(band: &[Option<f64>], qs: &[f64], n: usize, f: &dyn Fn(f64) -> f64, dist: Distribution, decreasing: bool, slack: f64) {
    for (k, &q) in qs.iter().enumerate() {
        let qi = if decreasing { 1.0 - q } else { q };
        let (a, b) = (f(dist.quantile((qi - 2.0 / n as f64).max(1e-9))), f(dist.quantile((qi + 2.0 / n as f64).min(1.0 - 1e-9))));
        let (lo, hi) = (a.min(b) * (1.0 - slack), a.max(b) * (1.0 + slack));
        let v = band[k].unwrap();
        assert!(v >= lo && v <= hi, "quantile {q}: {v} outside [{lo}, {hi}] (analytic {})", f(dist.quantile(qi)));
    }
}

/// Projection noise scales as 1/sqrt(N) (Phys. Rev. A 47, 3554 (1993)): a uniform atom count
/// gives the band of the analytic transform of its quantiles (whole numbers: 0.5 of
/// rounding allowed for in the slack).
#[test]
fn projection_band_is_the_transform_of_the_atom_count_quantiles() {
    let d = demo::designs()[2].clone();
    let n0 = d.atoms.count as f64;
    let e0 = evaluate(&d, &EvalOptions::default()).unwrap();
    let dist = Distribution::Uniform { low: 500.0, high: 20_000.0 };
    let mut req = BandRequest::new(vec![Uncertain { path: "atoms.count".into(), distribution: dist }]);
    req.samples = 300;
    req.quantiles = vec![0.05, 0.16, 0.5, 0.84, 0.95];
    let b = bands(&d, &req).unwrap();
    let band = &b.scalars.iter().find(|s| s.name == "projection_1s").unwrap().values;
    let f = |n: f64| e0.projection.sigma_1s * (n0 / n).sqrt();
    assert_band_follows(band, &req.quantiles, 300, &f, dist, true, 0.5 / 500.0);
    assert!(b.failed.is_empty() && b.method.contains("Latin hypercube"));
}

/// The Dick effect is linear in the laser spectrum (IEEE Trans. UFFC 45, 887 (1998)), so
/// sigma_Dick scales with a flicker floor's sigma_y: a log-normal floor gives the band
/// median * exp(sigma_ln Phi^-1(q)) times sigma_Dick per unit floor. The laser-only design
/// (one flicker term) makes the scaling exact.
#[test]
fn dick_band_is_the_transform_of_a_log_normal_laser_floor() {
    let mut d = demo::designs()[1].clone();
    let floor = 3e-16;
    d.laser.noise = vec![NoiseTerm::FlickerFloor { sigma_y: floor }];
    d.laser.drift_per_s = 0.0;
    let e0 = evaluate(&d, &EvalOptions::default()).unwrap();
    let dist = Distribution::LogNormal { median: 2e-16, sigma_ln: 0.7 };
    let mut req = BandRequest::new(vec![Uncertain { path: "laser.noise[0].sigma_y".into(), distribution: dist }]);
    req.samples = 250;
    req.seed = 77;
    let b = bands(&d, &req).unwrap();
    let band = &b.scalars.iter().find(|s| s.name == "dick_1s").unwrap().values;
    let f = |s: f64| e0.dick.sigma_1s * s / floor;
    assert_band_follows(band, &req.quantiles, 250, &f, dist, false, 1e-9);
    // The median band is close to the analytic median itself.
    assert!(rel(band[1].unwrap(), f(2e-16)) < 0.02);
}

/// A normal transition frequency: projection noise goes as 1/nu0 (Phys. Rev. A 47, 3554
/// (1993)), so the band's low quantile comes from the high tail of the frequency.
#[test]
fn normal_input_band_with_a_decreasing_output() {
    let d = demo::designs()[0].clone();
    let nu0 = d.transition.frequency_hz;
    let e0 = evaluate(&d, &EvalOptions::default()).unwrap();
    let dist = Distribution::Normal { mean: 5e14, sd: 4e13 };
    let mut req = BandRequest::new(vec![Uncertain { path: "transition.frequency_hz".into(), distribution: dist }]);
    req.samples = 200;
    let b = bands(&d, &req).unwrap();
    let band = &b.scalars.iter().find(|s| s.name == "projection_1s").unwrap().values;
    let f = |x: f64| e0.projection.sigma_1s * nu0 / x;
    assert_band_follows(band, &req.quantiles, 200, &f, dist, true, 1e-9);
}

/// Slow twin of the band machinery: plain Monte Carlo with the same seed, every sample
/// evaluated by hand and the quantile of sigma_y at each averaging time taken literally.
#[test]
fn curve_band_matches_samples_evaluated_by_hand() {
    let d = demo::designs()[1].clone();
    let mut req = BandRequest::new(vec![
        Uncertain { path: "laser.noise[0].sigma_y_1s".into(), distribution: Distribution::LogUniform { low: 3e-17, high: 3e-16 } },
        Uncertain { path: "atoms.count".into(), distribution: Distribution::Uniform { low: 1.0, high: 12.0 } },
    ]);
    req.samples = 23;
    req.sampling = Sampling::MonteCarlo;
    req.quantiles = vec![0.1, 0.5, 0.9];
    let run = BandRun::new(&d, &req).unwrap();
    let inputs = run.inputs().to_vec();
    let b = bands(&d, &req).unwrap();
    let mut curves = Vec::new();
    for row in &inputs {
        let mut s = d.clone();
        s.laser.noise[0] = NoiseTerm::WhiteFrequency { sigma_y_1s: row[0] };
        s.atoms.count = row[1].round() as u64;
        curves.push(evaluate(&s, &req.options).unwrap().curve);
    }
    // Durations are not uncertain, so every sample shares the nominal grid.
    for (i, &tau) in b.tau_s.iter().enumerate() {
        assert_eq!(b.curve_samples[i], 23);
        let mut v: Vec<f64> = curves.iter().map(|c| {
            assert_eq!(c.tau_s[i], tau);
            c.total[i]
        }).collect();
        v.sort_by(|a, b| a.total_cmp(b));
        for (k, &q) in req.quantiles.iter().enumerate() {
            let pos = 22.0 * q;
            let (j, w) = (pos.floor() as usize, pos - pos.floor());
            let want = if w == 0.0 { v[j] } else { v[j] + w * (v[j + 1] - v[j]) };
            assert!(rel(b.curve[k][i].unwrap(), want) < 1e-12, "tau {tau} q {q}");
        }
    }
}

#[test]
fn invalid_samples_are_listed_and_requests_checked() {
    let d = demo::designs()[0].clone();
    // A normal pulse duration that crosses zero: those samples are left out with the reason.
    let mut req = BandRequest::new(vec![Uncertain { path: "sequence.segments[2].duration_s".into(), distribution: Distribution::Normal { mean: 0.05, sd: 0.05 } }]);
    req.samples = 100;
    let b = bands(&d, &req).unwrap();
    assert!(!b.failed.is_empty() && b.failed.len() < 40, "{}", b.failed.len());
    assert!(b.failed.iter().all(|h| h.reason.contains("sequence.segments[2].duration_s")));
    assert!(b.method.contains(&format!("{} invalid samples", b.failed.len())));
    let text = serde_json::to_string(&b).unwrap();
    assert!(!text.contains("NaN") && !text.contains("inf"));
    // Varying durations: short taus are banded only where enough samples reach them.
    assert!(b.curve_samples.iter().all(|&n| n <= 100 - b.failed.len()));
    let mut bad = BandRequest::new(vec![Uncertain { path: "atoms.count".into(), distribution: Distribution::LogUniform { low: -1.0, high: 5.0 } }]);
    bad.samples = 1_000_000;
    bad.quantiles = vec![1.5];
    let e = bands(&d, &bad).unwrap_err();
    let paths: Vec<&str> = e.problems.iter().map(|p| p.path.as_str()).collect();
    assert!(paths.contains(&"samples") && paths.contains(&"quantiles[0]") && paths.contains(&"uncertain[0].distribution.low"), "{e}");
    let dup = BandRequest::new(vec![
        Uncertain { path: "atoms.count".into(), distribution: Distribution::Uniform { low: 1.0, high: 5.0 } },
        Uncertain { path: "atoms.count".into(), distribution: Distribution::Uniform { low: 1.0, high: 5.0 } },
    ]);
    assert_eq!(bands(&d, &dup).unwrap_err().problems[0].path, "uncertain[1].path");
}

/// The same seed gives the same bands; another seed other samples.
#[test]
fn bands_are_reproducible_by_seed() {
    let d = demo::designs()[0].clone();
    let mut req = BandRequest::new(vec![Uncertain { path: "laser.noise[1].sigma_y".into(), distribution: Distribution::LogNormal { median: 5e-17, sigma_ln: 0.5 } }]);
    req.samples = 20;
    assert_eq!(bands(&d, &req).unwrap(), bands(&d, &req).unwrap());
    let a = BandRun::new(&d, &req).unwrap().inputs().to_vec();
    req.seed = 2;
    assert_ne!(a, BandRun::new(&d, &req).unwrap().inputs().to_vec());
}

// ---------------------------------------------------------------------------------------
// The stage cache and the light outputs.
// ---------------------------------------------------------------------------------------

/// One random edit of a design: fields the cached stages read (probe time, lifetime,
/// detection, laser) and fields they do not (atom count, attack time, drift).
fn random_edit(d: &mut Design, rng: &mut Rng) {
    match rng.next_u64() % 7 {
        0 => d.atoms.count = rng.log_uniform(1.0, 1e4) as u64,
        1 => d.lock.attack_time_s = rng.log_uniform(2.0, 20.0),
        2 => d.laser.drift_per_s = rng.uniform(-1e-17, 1e-17),
        3 => d.laser.noise[0] = NoiseTerm::WhiteFrequency { sigma_y_1s: rng.log_uniform(1e-17, 1e-15) },
        4 => d.transition.lifetime_s = Some(rng.log_uniform(0.1, 10.0)),
        5 => d.detection.misread_ground = rng.uniform(0.0, 0.05),
        _ => {
            let n = d.sequence.segments.len();
            if let Segment::Pulse { duration_s, .. } | Segment::Free { duration_s } = &mut d.sequence.segments[n - 1 - (rng.next_u64() as usize % n.min(2))] {
                *duration_s *= rng.log_uniform(0.5, 2.0);
            }
        }
    }
}

/// Slow twin of the stage cache: a chain of random edits evaluated with one shared cache
/// gives, bit for bit, the evaluation of each design from scratch (the cache is keyed on
/// every value its stages read).
#[test]
fn cached_stages_give_the_same_evaluation_bit_for_bit() {
    let mut rng = Rng(0x5EED_CAC4E);
    let mut cache = StageCache::default();
    let opt = EvalOptions { plot_points: 32, tau_points: 12, ..Default::default() };
    let mut designs: Vec<Design> = demo::designs();
    designs.extend((0..4).map(|_| random_design(&mut rng)));
    for start in designs {
        let mut d = start;
        for _ in 0..12 {
            random_edit(&mut d, &mut rng);
            // A revisited design too: the cache keeps several entries per stage.
            let fresh = evaluate(&d, &opt).map(|e| serde_json::to_string(&e).unwrap()).map_err(|e| e.to_string());
            let cached = evaluate_with_cache(&d, &opt, &mut cache).map(|e| serde_json::to_string(&e).unwrap()).map_err(|e| e.to_string());
            assert_eq!(fresh, cached, "{}", d.name);
        }
    }
}

/// Slow twin of the light outputs: each output read off the full evaluation (a curve whose
/// last averaging time is tau, the table, the limits) agrees with the figure the locked
/// model gives directly, on random designs.
#[test]
fn light_outputs_agree_with_the_full_evaluation() {
    let mut rng = Rng(0x5EED_0u64 + 77);
    let mut cache = StageCache::default();
    for _ in 0..40 {
        let d = random_design(&mut rng);
        let tau = rng.log_uniform(10.0, 1e5);
        let outputs = [
            Output::SigmaAt { tau_s: tau },
            Output::Sigma1sEquivalent,
            Output::Projection1s,
            Output::Dick1s,
            Output::DickShare,
            Output::TimeToTarget { target: rng.log_uniform(1e-19, 1e-16) },
            Output::ProbePhaseRmsRad,
            Output::CycleTimeS,
        ];
        let full = evaluate(&d, &EvalOptions { tau_max_s: tau, ..Default::default() }).unwrap();
        for o in outputs {
            let light = o.evaluate(&d, &mut cache);
            let slow = match o {
                Output::SigmaAt { .. } => Ok(*full.curve.total.last().unwrap()),
                Output::TimeToTarget { .. } => o.read(&evaluate(&d, &o.options()).unwrap()),
                _ => o.read(&full),
            };
            match (light, slow) {
                (Ok(a), Ok(b)) => assert!(rel(a, b) < 1e-12, "{o:?}: {a:e} vs {b:e} for {}", d.name),
                (a, b) => assert_eq!(a, b, "{o:?}"),
            }
        }
    }
}
