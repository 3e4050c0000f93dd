//! The Dick effect: closed forms for Ramsey interrogation, the harmonic sum against a
//! slow direct sum, and the scaling laws.

mod common;
use clockwright_core::design::*;
use clockwright_core::dick::{dick_sum, fourier_coefficients};
use clockwright_core::noise::{NoiseTerm, Spectrum};
use clockwright_core::sensitivity::SensitivityFunction;
use clockwright_core::sequence::Probe;
use clockwright_core::{evaluate, EvalOptions};
use common::*;

fn ramsey(tp: f64, tr: f64, dead_s: f64, laser: Laser) -> Design {
    design(4.3e14, 1, vec![pulse(tp, 0.5), Segment::Free { duration_s: tr }, pulse(tp, 0.5)], dead_s, laser)
}

/// Ramsey with short pulses: |g_m|^2/g_0^2 = sinc^2(pi m T_R/T_c) (
/// IEEE Trans. UFFC 45, 887 (1998); J. Opt. B 5, S150 (2003)).
#[test]
fn ramsey_weights_are_sinc_squared() {
    let (tp, tr, dead) = (1e-7, 0.3, 0.2);
    let d = ramsey(tp, tr, dead, white_laser(1e-15));
    let e = evaluate(&d, &EvalOptions::default()).unwrap();
    let tc = e.cycle_time_s;
    let t_eff = tr + 2.0 * tp; // g is ~1 over the free time and rises within the pulses
    for (i, w) in e.dick.weights.iter().take(20).enumerate() {
        let m = (i + 1) as f64;
        let x = std::f64::consts::PI * m * t_eff / tc;
        let sinc2 = (x.sin() / x).powi(2);
        assert!((w - sinc2).abs() < 2e-6, "m {m}: {w} vs {sinc2}");
    }
}

/// Ramsey with short pulses and white laser frequency noise h0:
/// sigma_y^2(tau) = (h0 / 2 tau) (T_c - T_R) / T_R (same references).
#[test]
fn ramsey_white_noise_closed_form() {
    for &(tr, dead) in &[(0.3, 0.2), (0.05, 0.5), (1.0, 0.01)] {
        let s1 = 3e-16;
        let h0 = 2.0 * s1 * s1;
        let d = ramsey(1e-9, tr, dead, white_laser(s1));
        let e = evaluate(&d, &EvalOptions::default()).unwrap();
        let tc = e.cycle_time_s;
        let closed = h0 / 2.0 * (tc - tr) / tr;
        let ours = e.dick.sigma_1s.powi(2);
        assert!(rel(ours, closed) < 1e-5, "T_R {tr} dead {dead}: {ours:e} vs {closed:e}");
        assert!(e.dick.truncation_bound_relative <= 1e-6);
    }
}

/// Slow twin: the direct sum of |g_m|^2/g_0^2 S_y(m/T_c) over 200 000 harmonics against the
/// bounded sum, on random Rabi and Ramsey designs with mixed power-law noise; the two agree
/// within the bound the fast sum states (plus the direct sum's own tail, negligible here).
#[test]
fn dick_sum_matches_direct_sum() {
    let mut rng = Rng(31);
    for case in 0..6 {
        let laser = laser(vec![
            NoiseTerm::WhiteFrequency { sigma_y_1s: rng.log_uniform(1e-17, 1e-15) },
            NoiseTerm::FlickerFloor { sigma_y: rng.log_uniform(1e-17, 1e-15) },
            NoiseTerm::RandomWalk { sigma_y_1s: rng.log_uniform(1e-18, 1e-16) },
        ]);
        let t = rng.log_uniform(0.01, 0.5);
        let segs = if case % 2 == 0 {
            vec![pulse(t, 1.0)]
        } else {
            let tp = t * rng.uniform(0.01, 0.1);
            vec![pulse(tp, 0.5), Segment::Free { duration_s: t }, pulse(tp, 0.5)]
        };
        let d = design(5e14, 1, segs, rng.uniform(0.02, 1.0), laser);
        let probe = Probe::from_design(&d);
        let spec = Spectrum::from_laser(&d.laser, d.transition.frequency_hz);
        let gf = SensitivityFunction::new(&probe, 0.4 / probe.duration_s()).unwrap();
        let fast = dick_sum(&gf, &spec);
        let m_max = 200_000;
        let c = fourier_coefficients(&gf, m_max);
        let g0 = gf.g0();
        let mut direct = 0.0;
        for (i, cm) in c.iter().enumerate() {
            direct += cm.norm_sqr() / (g0 * g0) * spec.s_y((i + 1) as f64 / probe.cycle_s);
        }
        let e = rel(fast.variance_coefficient, direct);
        assert!(e <= fast.truncation_bound_relative + 1e-7, "case {case}: fast {} direct {direct} rel {e:e} bound {:e}", fast.variance_coefficient, fast.truncation_bound_relative);
        assert!(fast.truncation_bound_relative <= 1e-6);
    }
}

/// Phase-noise terms stop at the high cut-off; the sum to m_h = f_h T_c done directly.
#[test]
fn phase_noise_terms_stop_at_cutoff() {
    let mut l = laser(vec![NoiseTerm::PowerLaw { alpha: 2, coefficient: 1e-34, unit: clockwright_core::noise::SpectrumUnit::SY }, NoiseTerm::WhiteFrequency { sigma_y_1s: 1e-16 }]);
    l.high_cutoff_hz = 2000.0;
    let d = design(5e14, 1, vec![pulse(0.004, 0.5), Segment::Free { duration_s: 0.1 }, pulse(0.004, 0.5)], 0.1, l);
    let probe = Probe::from_design(&d);
    let spec = Spectrum::from_laser(&d.laser, d.transition.frequency_hz);
    let gf = SensitivityFunction::new(&probe, 0.4 / probe.duration_s()).unwrap();
    let fast = dick_sum(&gf, &spec);
    let c = fourier_coefficients(&gf, 300_000);
    let g0 = gf.g0();
    let direct: f64 = c.iter().enumerate().map(|(i, cm)| cm.norm_sqr() / (g0 * g0) * spec.s_y((i + 1) as f64 / probe.cycle_s)).sum();
    assert!(rel(fast.variance_coefficient, direct) <= fast.truncation_bound_relative + 1e-6, "{} vs {direct}", fast.variance_coefficient);
}

/// Scaling laws (property tests): doubling the laser's noise power multiplies the Dick
/// term by sqrt(2); for white laser noise the Dick term vanishes as the dead time goes to
/// zero (Proc. 19th PTTI (1987) 133).
#[test]
fn dick_scaling_laws() {
    let mut rng = Rng(77);
    for _ in 0..10 {
        let s = rng.log_uniform(1e-17, 1e-15);
        let t = rng.log_uniform(0.02, 0.5);
        // Pulses 1e-6 of the free time: the closed-form limit of ideal Ramsey.
        let mk = |sigma: f64, flicker: f64, dead: f64| {
            let l = laser(vec![NoiseTerm::WhiteFrequency { sigma_y_1s: sigma }, NoiseTerm::FlickerFloor { sigma_y: flicker }]);
            design(5e14, 1, vec![pulse(t * 1e-6, 0.5), Segment::Free { duration_s: t }, pulse(t * 1e-6, 0.5)], dead, l)
        };
        let a = evaluate(&mk(s, s, 0.1), &EvalOptions::default()).unwrap().dick.sigma_1s;
        let b = evaluate(&mk(s * 2f64.sqrt(), s * 2f64.sqrt(), 0.1), &EvalOptions::default()).unwrap().dick.sigma_1s;
        assert!(rel(b, a * 2f64.sqrt()) < 1e-9, "{b} vs {a}");
        let mut prev = f64::INFINITY;
        for &dead in &[0.3 * t, 0.03 * t, 0.003 * t, 0.0003 * t] {
            let d = evaluate(&mk(s, 1e-30, dead), &EvalOptions::default()).unwrap().dick.sigma_1s;
            assert!(d < prev, "Dick must fall with the dead time");
            prev = d;
        }
        let ratio = prev / evaluate(&mk(s, 1e-30, 0.3 * t), &EvalOptions::default()).unwrap().dick.sigma_1s;
        assert!(ratio < 0.15, "dead time 1000 times shorter leaves {ratio} of the Dick term");
    }
}

/// Laser terms of one exponent are summed into one when the spectrum is built (S_y is
/// linear in them): S_y at random frequencies against the direct sum over the terms as
/// written (slow twin), and an evaluation with a term split in two against the term whole
/// (white frequency noise h0 = 2 sigma_y(1 s)^2, IEEE Std 1139-2008).
#[test]
fn terms_of_one_exponent_sum_into_one() {
    use clockwright_core::noise::{NoiseTerm, Spectrum, SpectrumUnit};
    let mut rng = common::Rng(77);
    for _ in 0..100 {
        let nu0 = rng.log_uniform(1e14, 2e15);
        let f_high = rng.log_uniform(10.0, 1e6);
        let mut terms = Vec::new();
        for _ in 0..1 + (rng.next_u64() % 16) as usize {
            let alpha = (rng.next_u64() % 5) as i32 - 2;
            terms.push(match rng.next_u64() % 3 {
                0 => NoiseTerm::PowerLaw { alpha, coefficient: rng.log_uniform(1e-36, 1e-28), unit: SpectrumUnit::SY },
                1 => NoiseTerm::PowerLawAt { alpha, at_hz: rng.log_uniform(0.1, 1e3), value: rng.uniform(-120.0, -20.0), unit: SpectrumUnit::LDbc },
                _ => NoiseTerm::WhiteFrequency { sigma_y_1s: rng.log_uniform(1e-17, 1e-14) },
            });
        }
        let mut laser = common::laser(terms.clone());
        laser.high_cutoff_hz = f_high;
        let spec = Spectrum::from_laser(&laser, nu0);
        assert!(spec.terms.len() <= 5);
        for _ in 0..20 {
            let f = rng.log_uniform(1e-4, 1e7);
            let direct: f64 = terms
                .iter()
                .map(|t| t.h(nu0))
                .filter(|&(a, _)| !(a >= 1 && f > f_high))
                .map(|(a, h)| h * f.powi(a))
                .sum();
            assert!(rel(spec.s_y(f), direct) < 1e-13, "f {f}: {} vs {direct}", spec.s_y(f));
        }
    }
    // White FM of sigma split into two terms of sigma / sqrt(2) each (h0 = 2 sigma^2).
    let whole = common::design(4.3e14, 1, vec![common::pulse(0.1, 1.0)], 0.05, common::white_laser(2e-15));
    let mut split = whole.clone();
    let s = 2e-15 / 2f64.sqrt();
    split.laser.noise = vec![NoiseTerm::WhiteFrequency { sigma_y_1s: s }, NoiseTerm::WhiteFrequency { sigma_y_1s: s }];
    let (a, b) = (evaluate(&whole, &Default::default()).unwrap(), evaluate(&split, &Default::default()).unwrap());
    for (x, y) in a.curve.total.iter().zip(&b.curve.total) {
        assert!(rel(*x, *y) < 1e-13, "{x} vs {y}");
    }
    assert!(rel(a.dick.sigma_1s, b.dick.sigma_1s) < 1e-13);
}

/// A Dick sum beyond double precision stops at the first harmonic that overflows, and the
/// evaluation refuses it at once, naming the Dick part, instead of making a curve of
/// infinities first.
#[test]
fn dick_sum_beyond_double_range_is_refused_early() {
    use clockwright_core::noise::{NoiseTerm, Spectrum, SpectrumUnit};
    // Valid fields whose level overflows: S_y(1e-200 Hz) = 1e30 for f^2 noise, h_2 = 1e430.
    let mut laser = common::laser(vec![NoiseTerm::PowerLawAt { alpha: 2, at_hz: 1e-200, value: 1e30, unit: SpectrumUnit::SY }]);
    laser.high_cutoff_hz = 1e6;
    let d = common::design(4.3e14, 1, vec![common::pulse(0.1, 1.0)], 0.05, laser);
    let gf = clockwright_core::sensitivity::SensitivityFunction::new(&clockwright_core::sequence::Probe::from_design(&d), 0.0).unwrap();
    let sum = clockwright_core::dick::dick_sum(&gf, &Spectrum::from_laser(&d.laser, 4.3e14));
    assert!(!sum.variance_coefficient.is_finite());
    assert!(sum.harmonics_summed <= 2, "stopped after {} harmonics", sum.harmonics_summed);
    let e = evaluate(&d, &Default::default()).unwrap_err();
    assert_eq!(e.problems[0].path, "result.dick.sigma_1s", "{e}");
    assert!(e.problems[0].value.contains("out of the double-precision range"), "{e}");
}
