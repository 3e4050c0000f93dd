//! Two-level propagation and line shapes against closed forms and a slow RK4 twin.

mod common;
use clockwright_core::sequence::*;
use common::*;
use std::f64::consts::PI;

/// Rabi line shape for a square pulse without decay (e.g. J. Phys. B 37,
/// 4719 (2004), and any quantum-optics text): P = Omega^2/W^2 sin^2(W t/2), W^2 = Omega^2 + delta^2.
#[test]
fn rabi_line_shape_matches_closed_form() {
    let t = 0.1;
    let probe = Probe {
        steps: vec![Step { duration_s: t, omega: PI / t, phase: 0.0, offset: 0.0 }],
        gamma: 0.0,
        detuning_factor: 1.0,
        start_s: 0.0,
        cycle_s: t,
    };
    for k in 0..200 {
        let nu = -40.0 + 0.4 * k as f64;
        let d = 2.0 * PI * nu;
        let om = PI / t;
        let w = (om * om + d * d).sqrt();
        let closed = om * om / (w * w) * (w * t / 2.0).sin().powi(2);
        assert!((probe.excitation(nu) - closed).abs() < 1e-13, "nu {nu}");
    }
}

/// Ramsey fringes with short pulses: P = (1 + cos(2 pi nu T))/2 near line centre.
#[test]
fn ramsey_fringe_with_short_pulses() {
    let (tp, tr) = (1e-7, 0.2);
    let probe = Probe {
        steps: vec![
            Step { duration_s: tp, omega: PI / 2.0 / tp, phase: 0.0, offset: 0.0 },
            Step { duration_s: tr, omega: 0.0, phase: 0.0, offset: 0.0 },
            Step { duration_s: tp, omega: PI / 2.0 / tp, phase: 0.0, offset: 0.0 },
        ],
        gamma: 0.0,
        detuning_factor: 1.0,
        start_s: 0.0,
        cycle_s: 1.0,
    };
    for k in 0..50 {
        let nu = 0.1 * k as f64;
        let closed = (1.0 + (2.0 * PI * nu * (tr + 4.0 * tp / PI)).cos()) / 2.0;
        assert!((probe.excitation(nu) - closed).abs() < 1e-6, "nu {nu}");
    }
}

/// The propagator with decay (matrix exponential) against a slow RK4 integration of the
/// optical Bloch equations, on random segments.
#[test]
fn propagator_with_decay_matches_rk4() {
    let mut rng = Rng(11);
    for _ in 0..40 {
        let t = rng.log_uniform(1e-3, 2.0);
        let step = Step { duration_s: t, omega: rng.uniform(0.0, 20.0) / t, phase: rng.uniform(-PI, PI), offset: rng.uniform(-5.0, 5.0) / t };
        let gamma = rng.log_uniform(1e-3, 3.0) / t;
        let det = rng.uniform(-3.0, 3.0) / t;
        let g = Generator::new(&step, det, gamma);
        let r0 = [rng.uniform(-0.5, 0.5), rng.uniform(-0.5, 0.5), rng.uniform(-0.7, 0.7)];
        let fast = g.propagator(t).apply(r0);
        let slow = rk4_bloch(r0, g.axis, gamma, t, 20_000);
        for i in 0..3 {
            assert!((fast[i] - slow[i]).abs() < 1e-9, "component {i}: {fast:?} vs {slow:?}");
        }
    }
}

/// The closed form of a driven step with decay against the general scaling-and-squaring
/// series (an independent route to the same matrix exponential), on random steps that
/// cover both sides of the closed form's conditioning limits.
#[test]
fn driven_decay_closed_form_matches_series() {
    let mut rng = Rng(23);
    for _ in 0..2000 {
        let t = rng.log_uniform(1e-4, 10.0);
        let step = Step { duration_s: t, omega: rng.log_uniform(1e-3, 50.0) / t, phase: rng.uniform(-PI, PI), offset: 0.0 };
        let gamma = rng.log_uniform(1e-10, 10.0) / t;
        let det = if rng.uniform(0.0, 1.0) < 0.2 { 0.0 } else { rng.uniform(-20.0, 20.0) / t };
        let g = Generator::new(&step, det, gamma);
        let (a, b) = (g.propagator(t), g.propagator_by_series(t));
        for i in 0..3 {
            for j in 0..3 {
                assert!((a.m[i][j] - b.m[i][j]).abs() < 2e-14, "m[{i}][{j}]: {a:?} vs {b:?}");
            }
            assert!((a.c[i] - b.c[i]).abs() < 2e-14, "c[{i}]: {a:?} vs {b:?}");
        }
    }
}

/// The closed-form rotation (no decay) and the general matrix exponential agree in the
/// limit of vanishing decay.
#[test]
fn rotation_is_the_zero_decay_limit() {
    let step = Step { duration_s: 0.3, omega: 7.0, phase: 0.4, offset: 2.0 };
    let a = Generator::new(&step, 1.5, 0.0).propagator(0.3);
    let b = Generator::new(&step, 1.5, 1e-12).propagator(0.3);
    for i in 0..3 {
        for j in 0..3 {
            assert!((a.m[i][j] - b.m[i][j]).abs() < 1e-11);
        }
    }
}

/// A pi pulse much longer than the lifetime leaves the atom in the steady state of the
/// driven, damped two-level system: w = -1/(1 + s) with s = 2 Omega^2/Gamma^2 on resonance
/// (optical Bloch equations with pure radiative damping, any quantum-optics text).
#[test]
fn long_pulse_with_decay_reaches_steady_state() {
    let gamma = 50.0;
    let omega = 30.0;
    let step = Step { duration_s: 10.0, omega, phase: 0.0, offset: 0.0 };
    let r = Generator::new(&step, 0.0, gamma).propagator(10.0).apply(GROUND);
    let s = 2.0 * omega * omega / (gamma * gamma);
    assert!((r[2] - (-1.0 / (1.0 + s))).abs() < 1e-12, "{r:?}");
}

/// Free evolution with decay in closed form against the RK4 twin.
#[test]
fn free_evolution_with_decay_matches_rk4() {
    let step = Step { duration_s: 0.7, omega: 0.0, phase: 0.0, offset: 3.0 };
    let g = Generator::new(&step, -1.2, 0.9);
    let r0 = [0.3, -0.5, 0.1];
    let fast = g.propagator(0.7).apply(r0);
    let slow = rk4_bloch(r0, g.axis, 0.9, 0.7, 20_000);
    for i in 0..3 {
        assert!((fast[i] - slow[i]).abs() < 1e-12, "{fast:?} vs {slow:?}");
    }
}

/// Lock centre of a two-point lock probing at +-`d`: P(c + d) = P(c - d), by bisection.
fn lock_centre(probe: &Probe, d: f64, span: f64) -> f64 {
    let f = |c: f64| probe.excitation(c + d) - probe.excitation(c - d);
    let (mut a, mut b) = (-span, span);
    let fa = f(a);
    for _ in 0..200 {
        let m = (a + b) / 2.0;
        if (f(m) > 0.0) == (fa > 0.0) { a = m } else { b = m }
    }
    (a + b) / 2.0
}

fn probe_of(segments: Vec<clockwright_core::design::Segment>, light_shift_hz: f64) -> Probe {
    use clockwright_core::design::Segment;
    let segs: Vec<Segment> = segments
        .into_iter()
        .map(|s| match s {
            Segment::Pulse { duration_s, area_pi, phase_deg, .. } => Segment::Pulse { duration_s, area_pi, phase_deg, detuning_offset_hz: light_shift_hz },
            s => s,
        })
        .collect();
    let d = design(5e14, 1, segs, 0.1, white_laser(1e-16));
    Probe::from_design(&d)
}

/// The hyper-Ramsey preset suppresses the probe light shift: with the same uncompensated
/// shift during the pulses, the lock centre moves hundreds of times less than with Ramsey,
/// and the residual grows faster than linearly (Phys. Rev. A 82, 011804 (2010):
/// the residual shift is of higher order in the light shift).
#[test]
fn hyper_ramsey_suppresses_the_light_shift() {
    let (tp, t) = (0.01, 0.5);
    let d = 0.25 / t;
    let shift = |preset: Preset, ls: f64| lock_centre(&probe_of(preset.segments(), ls), d, 0.4 / t);
    let ramsey = Preset::Ramsey { pulse_s: tp, free_s: t };
    let hyper = Preset::HyperRamsey { pulse_s: tp, free_s: t };
    let (r1, h1) = (shift(ramsey, 0.5), shift(hyper, 0.5));
    assert!(r1.abs() > 300.0 * h1.abs(), "Ramsey {r1} Hz, hyper-Ramsey {h1} Hz");
    let h4 = shift(hyper, 2.0);
    assert!(h4.abs() > 10.0 * h1.abs(), "residual must grow faster than linearly: {h1} -> {h4}");
    assert!(shift(hyper, 0.0).abs() < 1e-9);
}

/// The mirror symmetry used to halve the line-shape work: for drive phases 0 and 180
/// degrees and no offsets, P(-nu) equals P(nu) computed directly (derivation in
/// `Probe::line_is_even`; checked here by brute force on random sequences with decay).
#[test]
fn even_lines_are_even_and_odd_ones_are_flagged() {
    use clockwright_core::design::Segment;
    let mut rng = Rng(41);
    for case in 0..60 {
        let mut segs = Vec::new();
        for _ in 0..1 + case % 4 {
            let phase_deg = [0.0, 180.0, -180.0][(rng.uniform(0.0, 2.999)) as usize];
            segs.push(Segment::Pulse { duration_s: rng.log_uniform(1e-3, 0.05), area_pi: rng.uniform(0.2, 1.5), phase_deg, detuning_offset_hz: 0.0 });
            if rng.uniform(0.0, 1.0) < 0.5 {
                segs.push(Segment::Free { duration_s: rng.log_uniform(1e-3, 0.3) });
            }
        }
        while !matches!(segs.last(), Some(Segment::Pulse { .. })) {
            segs.pop();
        }
        let mut d = design(5e14, 1, segs, 0.05, white_laser(1e-15));
        d.transition.lifetime_s = Some(rng.log_uniform(0.05, 100.0));
        let probe = Probe::from_design(&d);
        assert!(probe.line_is_even(), "case {case}");
        for _ in 0..10 {
            let nu = rng.uniform(0.0, 5.0) / probe.duration_s();
            let (p, m) = (probe.excitation(nu), probe.excitation(-nu));
            assert!((p - m).abs() < 1e-14, "case {case}: P({nu}) = {p}, P(-nu) = {m}");
        }
    }
    // A 90-degree phase or a detuning offset breaks the symmetry and is flagged.
    for seg in [
        Segment::Pulse { duration_s: 0.01, area_pi: 0.5, phase_deg: 90.0, detuning_offset_hz: 0.0 },
        Segment::Pulse { duration_s: 0.01, area_pi: 0.5, phase_deg: 0.0, detuning_offset_hz: 3.0 },
    ] {
        let segs = vec![pulse(0.01, 0.5), Segment::Free { duration_s: 0.1 }, seg];
        let probe = Probe::from_design(&design(5e14, 1, segs, 0.05, white_laser(1e-15)));
        assert!(!probe.line_is_even());
        let nu = 0.3 / probe.duration_s();
        assert!((probe.excitation(nu) - probe.excitation(-nu)).abs() > 1e-6);
    }
}
