//! The sensitivity function g(t) against a brute-force twin: the excitation's response to
//! a small laser phase step at many instants (the definition of IEEE
//! Trans. UFFC 45, 887 (1998)), on random sequences with and without decay.

mod common;
use clockwright_core::dick::fourier_coefficients;
use clockwright_core::sensitivity::SensitivityFunction;
use clockwright_core::sequence::*;
use common::*;
use std::f64::consts::PI;

/// Excitation with a laser phase step `dphi` at time `t` after the probe start: the step
/// containing t is split and every later drive gets the extra phase.
fn excitation_with_phase_step(probe: &Probe, nu: f64, t: f64, dphi: f64) -> f64 {
    let mut steps = Vec::new();
    let mut elapsed = 0.0;
    for s in &probe.steps {
        let end = elapsed + s.duration_s;
        if t >= end {
            steps.push(*s);
        } else if t <= elapsed {
            steps.push(Step { phase: s.phase + dphi, ..*s });
        } else {
            steps.push(Step { duration_s: t - elapsed, ..*s });
            steps.push(Step { duration_s: end - t, phase: s.phase + dphi, ..*s });
        }
        elapsed = end;
    }
    let mut r = GROUND;
    let det = 2.0 * PI * nu * probe.detuning_factor;
    for s in &steps {
        r = Generator::new(s, det + 0.0, probe.gamma).propagator(s.duration_s).apply(r);
    }
    // A phase step also turns the free precession frame; free steps carry no drive,
    // so only pulses see it, as above.
    (r[2] + 1.0) / 2.0
}

fn brute_g(probe: &Probe, nu: f64, t: f64) -> f64 {
    let d = 1e-5;
    2.0 * (excitation_with_phase_step(probe, nu, t, d) - excitation_with_phase_step(probe, nu, t, -d)) / (2.0 * d)
}

fn random_probe(rng: &mut Rng, decay: bool) -> Probe {
    let n_pulses = 1 + (rng.next_u64() % 4) as usize;
    let mut steps = Vec::new();
    for k in 0..n_pulses {
        if k > 0 && rng.uniform(0.0, 1.0) < 0.7 {
            steps.push(Step { duration_s: rng.log_uniform(1e-3, 0.3), omega: 0.0, phase: 0.0, offset: 0.0 });
        }
        let t = rng.log_uniform(1e-3, 0.2);
        steps.push(Step { duration_s: t, omega: rng.uniform(0.2, 2.5) * PI / t, phase: rng.uniform(-PI, PI), offset: rng.uniform(-20.0, 20.0) });
    }
    let probe_len: f64 = steps.iter().map(|s| s.duration_s).sum();
    let start = rng.uniform(0.0, 0.3);
    Probe {
        steps,
        gamma: if decay { rng.log_uniform(0.05, 5.0) / probe_len } else { 0.0 },
        detuning_factor: 1.0,
        start_s: start,
        cycle_s: start + probe_len + rng.uniform(0.0, 0.3),
    }
}

#[test]
fn g_matches_brute_force_phase_steps_on_random_sequences() {
    let mut rng = Rng(2024);
    for case in 0..24 {
        let probe = random_probe(&mut rng, case % 2 == 1);
        let nu = rng.uniform(-1.0, 1.0) / probe.duration_s();
        let gf = SensitivityFunction::new(&probe, nu).unwrap();
        let len = probe.duration_s();
        let mut dot = 0.0;
        let mut pairs = Vec::new();
        for k in 0..60 {
            let t = len * (k as f64 + 0.37) / 60.0;
            let b = brute_g(&probe, nu, t);
            let f = gf.at(probe.start_s + t);
            dot += b * f;
            pairs.push((b, f));
        }
        let sign = if dot < 0.0 { -1.0 } else { 1.0 };
        for (b, f) in pairs {
            assert!((sign * b - f).abs() < 2e-7, "case {case}: brute {b} ours {f}");
        }
        // g vanishes in the dead time.
        if probe.start_s > 0.0 {
            assert_eq!(gf.at(probe.start_s / 2.0), 0.0);
        }
    }
}

/// The static response is the integral of g: dP/dnu = pi * integral g dt (nu in Hz),
/// because a constant detuning is a phase ramp (same reference, eq. for the error signal).
#[test]
fn integral_of_g_is_the_slope_of_the_line() {
    let mut rng = Rng(99);
    for case in 0..20 {
        let probe = random_probe(&mut rng, case % 2 == 0);
        let nu = rng.uniform(0.05, 0.6) / probe.duration_s();
        let gf = SensitivityFunction::new(&probe, nu).unwrap();
        let h = 1e-6 / probe.duration_s();
        let slope = (probe.excitation(nu + h) - probe.excitation(nu - h)) / (2.0 * h);
        let from_g = PI * gf.integral();
        assert!((slope.abs() - from_g.abs()).abs() < 1e-6 * slope.abs().max(1e-3), "case {case}: {slope} vs {from_g}");
    }
}

/// Slow twin of the m-th complex Fourier coefficient of g(t): composite Simpson on 400 000
/// intervals of (1/T_c) integral g(t) exp(-2 pi i m t / T_c) dt, as (re, im).
fn simpson_coefficient(gf: &SensitivityFunction, m: usize) -> (f64, f64) {
    let tc = gf.cycle_s;
    let n = 400_000;
    let dt = tc / n as f64;
    let (mut re, mut im) = (0.0, 0.0);
    for k in 0..=n {
        let t = (k as f64 * dt).min(tc * (1.0 - 1e-15));
        let w = if k == 0 || k == n { 1.0 } else if k % 2 == 1 { 4.0 } else { 2.0 };
        let g = gf.at(t);
        let ph = -2.0 * PI * m as f64 * t / tc;
        re += w * g * ph.cos();
        im += w * g * ph.sin();
    }
    (re * dt / 3.0 / tc, im * dt / 3.0 / tc)
}

/// The closed-form Fourier coefficients against direct quadrature (composite Simpson on
/// 400 000 intervals) of the same g(t), on random sequences.
#[test]
fn fourier_coefficients_match_direct_quadrature() {
    let mut rng = Rng(5);
    for case in 0..6 {
        let probe = random_probe(&mut rng, case % 2 == 0);
        let gf = SensitivityFunction::new(&probe, 0.3 / probe.duration_s()).unwrap();
        let ms = [1usize, 2, 3, 7, 20, 51, 150];
        let fast = fourier_coefficients(&gf, 150);
        for &m in &ms {
            let (re, im) = simpson_coefficient(&gf, m);
            let c = fast[m - 1];
            let scale = c.norm_sqr().sqrt().max(1e-6);
            assert!(((c.re - re).powi(2) + (c.im - im).powi(2)).sqrt() < 1e-6 * scale.max(1e-3), "case {case} m {m}: {c} vs {re}+{im}i");
        }
    }
}

/// Long pulses of many Rabi cycles under decay (hundreds of g(t) pieces, whose integrals
/// the harmonic generator takes four at a time, by Taylor form and by moments): the
/// Fourier coefficients against direct quadrature (composite Simpson on 400 000
/// intervals) of the same g(t), at harmonics on both sides of the Taylor/moment switch
/// (Fourier coefficients as defined in IEEE Trans. UFFC 45, 887 (1998)).
#[test]
fn fourier_coefficients_of_many_piece_pulses_match_direct_quadrature() {
    let mut rng = Rng(909);
    for case in 0..4 {
        let dur = rng.log_uniform(0.01, 1.0);
        let mut d = design(4.3e14, 1, vec![pulse(dur, rng.uniform(20.0, 50.0))], rng.uniform(0.0, 0.5) * dur, white_laser(1e-15));
        d.transition.lifetime_s = Some(dur * rng.log_uniform(0.3, 30.0));
        let probe = Probe::from_design(&d);
        let gf = SensitivityFunction::new(&probe, 0.2 / probe.duration_s()).unwrap();
        let pieces = gf.pieces.iter().filter(|p| !p.coef.is_empty()).count();
        assert!(pieces >= 64, "case {case}: only {pieces} pieces");
        let tc = probe.cycle_s;
        // theta = 2 pi m h / T_c crosses 3 near m = 3 T_c / (2 pi h).
        let h = dur / pieces as f64;
        let m_switch = (3.0 * tc / (2.0 * PI * h)) as usize;
        let ms = [1usize, 5, 37, m_switch.saturating_sub(1).max(1), m_switch + 2, 2 * m_switch + 3];
        let fast = fourier_coefficients(&gf, *ms.iter().max().unwrap());
        for &m in &ms {
            let (re, im) = simpson_coefficient(&gf, m);
            let c = fast[m - 1];
            let gmax = gf.max_abs();
            assert!(((c.re - re).powi(2) + (c.im - im).powi(2)).sqrt() < 1e-7 * gmax, "case {case} m {m} ({pieces} pieces): {c} vs {re}+{im}i");
        }
    }
}
