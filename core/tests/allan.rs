//! Allan and modified Allan variance by transfer-function integration, checked against
//! closed forms and against a slow direct quadrature.

mod common;
use clockwright_core::allan::*;
use common::rel;
use std::f64::consts::{LN_2, PI};

fn power_law(a: i32, h: f64, f_h: f64) -> impl Fn(f64) -> f64 {
    move |f: f64| if a >= 1 && f > f_h { 0.0 } else { h * f.powi(a) }
}

/// IEEE Std 1139-2008 closed forms of the Allan variance for every power law, against
/// our integration; relative error at most 1e-3 (the requirement). The phase-noise
/// forms hold for 2 pi f_h tau >> 1, so tau is chosen with f_h tau >= 1e3.
#[test]
fn allan_matches_ieee1139_closed_forms() {
    let f_h = 1e3;
    for &tau in &[1.0, 3.7, 10.0, 100.0, 1e3] {
        for a in -2..=2 {
            let h = 1e-30;
            let numeric = variance(&power_law(a, h, f_h), tau, Variance::Allan, &[f_h]);
            let closed = allan_variance_power_law(a, h, tau, f_h);
            let e = rel(numeric, closed);
            assert!(e < 1e-3, "alpha {a} tau {tau}: numeric {numeric:e} closed {closed:e} rel {e:e}");
        }
    }
}

/// Frequency-noise closed forms are exact (no cut-off), so they hold much tighter.
#[test]
fn allan_frequency_noise_forms_to_1e6() {
    for &tau in &[0.01, 1.0, 1e4] {
        for a in -2..=0 {
            let numeric = variance(&power_law(a, 1.0, 1e3), tau, Variance::Allan, &[]);
            let closed = allan_variance_power_law(a, 1.0, tau, 1e3);
            assert!(rel(numeric, closed) < 1e-6, "alpha {a} tau {tau}: {numeric} vs {closed}");
        }
    }
}

/// Modified Allan variance with continuous averaging: white FM h0/(4 tau) (IEEE Std
/// 1139-2008); flicker FM (27/8 ln 3 - 4 ln 2) h_-1 = 0.93523 h_-1, i.e. 0.6746 of the
/// Allan variance (ratio from memory; value confirmed by mpmath quadosc); random walk
/// (11 pi^2/20) h_-2 tau (from memory; confirmed by mpmath quadosc).
#[test]
fn modified_allan_constants() {
    for &tau in &[0.5, 2.0, 300.0] {
        let w = variance(&power_law(0, 1.0, 1e3), tau, Variance::Modified, &[]);
        assert!(rel(w, 1.0 / (4.0 * tau)) < 1e-5, "white {w}");
        let f = variance(&power_law(-1, 1.0, 1e3), tau, Variance::Modified, &[]);
        let fc = 27.0 / 8.0 * 3f64.ln() - 4.0 * LN_2;
        assert!(rel(f, fc) < 1e-5, "flicker {f} vs {fc}");
        let r = variance(&power_law(-2, 1.0, 1e3), tau, Variance::Modified, &[]);
        assert!(rel(r, 11.0 * PI * PI / 20.0 * tau) < 1e-5, "random walk {r}");
    }
}

/// Slow twin: trapezoid rule on a very fine uniform grid in u = pi f tau up to a large
/// limit, plus the mean-kernel tail; compared on spectra with kinks (a two-slope table-like
/// spectrum and a servo-shaped one) at random tau.
#[test]
fn integration_matches_slow_direct_quadrature() {
    let mut rng = common::Rng(7);
    for _ in 0..6 {
        let tau = rng.log_uniform(0.05, 50.0);
        let t_s = rng.log_uniform(0.1, 20.0);
        let corner = 1.0 / (2.0 * PI * t_s);
        let s = move |f: f64| {
            let x = (2.0 * PI * f * t_s).powi(2);
            let hp = x / (1.0 + x);
            (1e-32 / f + 4e-33 + 1e-33 / (f * f)) * hp + 2e-31 * (1.0 - hp)
        };
        let fast = variance(&s, tau, Variance::Allan, &[corner]);
        let scale = PI * tau;
        let u_max = 4000.0 * PI;
        let n = 4_000_000usize;
        let du = u_max / n as f64;
        let mut slow = 0.0;
        for k in 1..=n {
            let u = k as f64 * du;
            let w = if k == n { 0.5 } else { 1.0 };
            slow += w * s(u / scale) * u.sin().powi(4) / (u * u) * du;
        }
        // Tail beyond u_max with the mean kernel 3/8 (the spectrum is white there).
        slow += 3.0 / 8.0 * 4e-33 / u_max;
        slow *= 2.0 / scale;
        assert!(rel(fast, slow) < 2e-5, "tau {tau} Ts {t_s}: fast {fast:e} slow {slow:e}");
    }
}

/// The closed form of filtered white noise against our integration of
/// h0 / (1 + (2 pi f T)^2).
#[test]
fn lowpass_white_closed_form_matches_integration() {
    for &t_c in &[0.3, 5.0, 100.0] {
        for &tau in &[1e-4, 0.01, 0.7, 3.0, 50.0, 1e4] {
            let s = |f: f64| 2e-30 / (1.0 + (2.0 * PI * f * t_c).powi(2));
            let numeric = variance(&s, tau, Variance::Allan, &[1.0 / (2.0 * PI * t_c)]);
            let closed = allan_variance_lowpass_white(2e-30, tau, t_c);
            assert!(rel(numeric, closed) < 1e-5, "Tc {t_c} tau {tau}: {numeric:e} vs {closed:e}");
        }
    }
}

/// The tabulated universal shapes of servo-filtered noise against the transfer-function
/// integral itself (their slow twin), on random averaging and servo times.
#[test]
fn filtered_shapes_match_integration() {
    let mut rng = common::Rng(41);
    for _ in 0..60 {
        let tau = rng.log_uniform(1e-5, 1e8);
        let t_s = rng.log_uniform(1e-5, 1e6);
        let corner = [1.0 / (2.0 * PI * t_s)];
        let hp = move |f: f64| {
            let x = (2.0 * PI * f * t_s).powi(2);
            x / (1.0 + x)
        };
        let a = variance(&|f| hp(f) / f, tau, Variance::Allan, &corner);
        let m = variance(&|f| hp(f) / f, tau, Variance::Modified, &corner);
        let w = variance(&|f| 1.0 / (1.0 + (2.0 * PI * f * t_s).powi(2)), tau, Variance::Modified, &corner);
        assert!(rel(allan_variance_flicker_highpass(1.0, tau, t_s), a) < 2e-5, "tau {tau} T {t_s}: {} vs {a}", allan_variance_flicker_highpass(1.0, tau, t_s));
        assert!(rel(mod_variance_flicker_highpass(1.0, tau, t_s), m) < 2e-5, "tau {tau} T {t_s}");
        assert!(rel(mod_variance_lowpass_white(1.0, tau, t_s), w) < 2e-5, "tau {tau} T {t_s}");
    }
}

/// Several spectra integrated on shared nodes (`variances`) against each one integrated
/// alone (`variance`, its slow twin: the spectrum evaluated once per integral): the same
/// numbers bit for bit, for both variances, on random spectra with kinks and random tau.
/// (The integrals themselves: IEEE Trans. Instrum. Meas. IM-20, 105 (1971), checked above.)
#[test]
fn shared_node_integrals_equal_single_ones_bit_for_bit() {
    let mut rng = common::Rng(1201);
    for _ in 0..200 {
        let tau = rng.log_uniform(1e-6, 1e9);
        let t_s = rng.log_uniform(1e-5, 1e6);
        let knee = rng.log_uniform(1e-3, 1e6);
        let h = [rng.log_uniform(1e-36, 1e-26), rng.log_uniform(1e-36, 1e-26), rng.log_uniform(1e-36, 1e-26)];
        let features = [1.0 / (2.0 * PI * t_s), knee, rng.log_uniform(1e-4, 1e8)];
        let a = move |f: f64| {
            let x = (2.0 * PI * f * t_s).powi(2);
            (h[0] / f + h[1]) * x / (1.0 + x)
        };
        let b = move |f: f64| if f < knee { h[2] * f * f } else { h[2] * knee * knee };
        let c = move |f: f64| h[1] / (1.0 + f * t_s) + h[0] * f;
        let which = [Variance::Allan, Variance::Modified, Variance::Allan];
        let together = variances(&|f| [a(f), b(f), c(f)], tau, which, &features);
        let alone = [variance(&a, tau, which[0], &features), variance(&b, tau, which[1], &features), variance(&c, tau, which[2], &features)];
        for k in 0..3 {
            assert_eq!(together[k].to_bits(), alone[k].to_bits(), "tau {tau} T {t_s} spectrum {k}: {} vs {}", together[k], alone[k]);
        }
    }
}

/// The locked laser's curve of a design whose laser has a table (its three
/// transfer-function integrals made on shared nodes) against each integral made alone
/// from the public spectrum (slow twin): laser part, modified deviation and free-running
/// deviation, on random tables, servos and averaging times. Power-law closed forms:
/// IEEE Std 1139-2008; linear drift D: sigma^2 = D^2 tau^2 / 2 (common practice).
#[test]
fn table_laser_curve_equals_separate_integrals() {
    use clockwright_core::noise::{NoiseTerm, Spectrum, SpectrumTable, SpectrumUnit};
    let mut rng = common::Rng(5150);
    for _ in 0..8 {
        let rows = 2 + (rng.next_u64() % 40) as usize;
        let (lo, hi) = (rng.log_uniform(1e-3, 1.0), rng.log_uniform(10.0, 1e5));
        let points = (0..rows).map(|k| [lo * (hi / lo).powf(k as f64 / (rows - 1) as f64), rng.log_uniform(1e-34, 1e-28)]).collect();
        let mut laser = common::laser(vec![NoiseTerm::FlickerFloor { sigma_y: rng.log_uniform(1e-17, 1e-15) }, NoiseTerm::PowerLaw { alpha: 2, coefficient: 1e-33, unit: SpectrumUnit::SY }]);
        laser.table = Some(SpectrumTable { unit: SpectrumUnit::SY, points });
        laser.high_cutoff_hz = hi;
        laser.drift_per_s = rng.uniform(-1e-17, 1e-17);
        let mut d = common::design(4.3e14, 10, vec![common::pulse(rng.log_uniform(0.01, 1.0), 1.0)], rng.log_uniform(0.01, 1.0), laser);
        d.lock.attack_time_s = d.cycle_time_s() * rng.log_uniform(1.0, 100.0);
        let e = clockwright_core::evaluate(&d, &Default::default()).unwrap();
        let spec = Spectrum::from_laser(&d.laser, 4.3e14);
        let t = d.lock.attack_time_s;
        let mut features = spec.breakpoints();
        features.push(1.0 / (2.0 * PI * t));
        let hp = |f: f64| {
            let x = 2.0 * PI * f * t;
            x * x / (1.0 + x * x)
        };
        let h0 = 2.0 * e.projection.sigma_1s.powi(2) + 2.0 * e.dick.sigma_1s.powi(2);
        for (k, &tau) in e.curve.tau_s.iter().enumerate() {
            let laser = variance(&|f| spec.s_y(f) * hp(f), tau, Variance::Allan, &features);
            let modv = variance(&|f| spec.s_y(f) * hp(f) + h0 / (1.0 + (2.0 * PI * f * t).powi(2)), tau, Variance::Modified, &features);
            let closed: f64 = spec.terms.iter().map(|&(a, h)| allan_variance_power_law(a, h, tau, spec.f_high)).sum();
            let free = closed + variance(&|f| spec.table_s_y(f), tau, Variance::Allan, &features) + d.laser.drift_per_s.powi(2) * tau * tau / 2.0;
            assert_eq!(e.curve.laser[k].to_bits(), laser.sqrt().to_bits(), "tau {tau}");
            assert!(rel(e.curve.mod_total[k], modv.sqrt()) < 1e-13, "tau {tau}: {} vs {}", e.curve.mod_total[k], modv.sqrt());
            assert!(rel(e.curve.free_laser[k], free.sqrt()) < 1e-14, "tau {tau}");
        }
    }
}
