//! Projection-noise limit, operating point, detection and entanglement.

mod common;
use clockwright_core::design::*;
use clockwright_core::projection::majority_error;
use clockwright_core::{evaluate, EvalOptions};
use common::*;
use std::f64::consts::PI;

fn ramsey_design(nu0: f64, n: u64, tr: f64, dead: f64) -> Design {
    design(nu0, n, vec![pulse(1e-9, 0.5), Segment::Free { duration_s: tr }, pulse(1e-9, 0.5)], dead, white_laser(1e-17))
}

/// Ramsey with short pulses: sigma_y(tau) = 1/(2 pi nu0 T_R) sqrt(T_c/(N tau))
/// (Phys. Rev. A 47, 3554 (1993); Rev. Mod. Phys. 87, 637 (2015)).
#[test]
fn ramsey_projection_limit() {
    for &(nu0, n, tr, dead) in &[(4.29e14, 1u64, 0.5, 0.2), (1.12e15, 4, 0.1, 0.05), (5.18e14, 3000, 0.8, 0.9), (6.42e14, 17, 2.0, 0.3)] {
        let e = evaluate(&ramsey_design(nu0, n, tr, dead), &EvalOptions::default()).unwrap();
        let tc = e.cycle_time_s;
        let closed = 1.0 / (2.0 * PI * nu0 * tr) * (tc / n as f64).sqrt();
        assert!(rel(e.projection.sigma_1s, closed) < 1e-6, "N {n}: {} vs {closed}", e.projection.sigma_1s);
    }
}

/// Rabi: the engine's optimum of the projection-noise constant against an independent
/// brute force: the closed-form Rabi line (any quantum-optics text) scanned on 200 000
/// detunings on the flank (excitation from 5% to 95%, the engine's documented search zone).
#[test]
fn rabi_projection_optimum_matches_brute_force() {
    let t = 0.1;
    let d = design(1e15, 1, vec![pulse(t, 1.0)], 0.05, white_laser(1e-17));
    let e = evaluate(&d, &EvalOptions::default()).unwrap();
    let om = PI / t;
    let p = |nu: f64| {
        let dl = 2.0 * PI * nu;
        let w = (om * om + dl * dl).sqrt();
        om * om / (w * w) * (w * t / 2.0).sin().powi(2)
    };
    let mut best = 0.0f64;
    let mut best_nu = 0.0;
    for k in 1..200_000 {
        let nu = 8.66 * k as f64 / 200_000.0; // central lobe: first zero at sqrt(3)/(2 t)
        let h = 1e-7;
        let slope = (p(nu + h) - p(nu - h)) / (2.0 * h);
        let pv = p(nu);
        if pv >= 0.05 && pv <= 0.95 {
            let m = slope.abs() / (pv * (1.0 - pv)).sqrt();
            if m > best {
                best = m;
                best_nu = nu;
            }
        }
    }
    let sigma_brute = 1.0 / (1e15 * best) * e.cycle_time_s.sqrt();
    assert!(rel(e.projection.sigma_1s, sigma_brute) < 1e-6, "{} vs {sigma_brute} (brute at {best_nu} Hz, ours at {} Hz)", e.projection.sigma_1s, e.operating_point.detuning_hz);
}

/// Scaling laws (property tests): sigma_QPN goes as 1/sqrt(N) and 1/nu0 (same references).
#[test]
fn projection_scaling_laws() {
    let mut rng = Rng(3);
    for _ in 0..20 {
        let nu0 = rng.log_uniform(1e14, 2e15);
        let n = 1 + (rng.next_u64() % 1000);
        let t = rng.log_uniform(0.01, 1.0);
        let mk = |nu0: f64, n: u64| design(nu0, n, vec![pulse(t, 1.0)], 0.1, white_laser(1e-17));
        let a = evaluate(&mk(nu0, n), &EvalOptions::default()).unwrap().projection.sigma_1s;
        let b = evaluate(&mk(nu0, 4 * n), &EvalOptions::default()).unwrap().projection.sigma_1s;
        let c = evaluate(&mk(3.0 * nu0, n), &EvalOptions::default()).unwrap().projection.sigma_1s;
        assert!(rel(b, a / 2.0) < 1e-9);
        assert!(rel(c, a / 3.0) < 1e-9);
    }
}

/// Majority vote of independent rounds (common practice): the binomial tail, checked
/// against a literal enumeration of all 2^n outcomes.
#[test]
fn majority_vote_matches_enumeration() {
    for n in 1..=11u32 {
        for &e in &[0.001f64, 0.03, 0.2, 0.45] {
            let mut total = 0.0;
            for mask in 0u32..(1 << n) {
                let wrong = mask.count_ones();
                let p = e.powi(wrong as i32) * (1.0 - e).powi((n - wrong) as i32);
                if 2 * wrong > n {
                    total += p;
                } else if 2 * wrong == n {
                    total += p / 2.0;
                }
            }
            assert!((majority_error(e, n) - total).abs() < 1e-14, "n {n} e {e}");
        }
    }
}

/// Detection errors: P' = e_g + (1 - e_g - e_e) P enters the projection noise; with errors
/// the limit is worse than without and the slope shrinks by the contrast.
#[test]
fn detection_errors_cost_stability() {
    let mut d = design(1e15, 1, vec![pulse(0.1, 1.0)], 0.05, white_laser(1e-17));
    let clean = evaluate(&d, &EvalOptions::default()).unwrap();
    d.detection.misread_ground = 0.05;
    d.detection.misread_excited = 0.05;
    let noisy = evaluate(&d, &EvalOptions::default()).unwrap();
    assert!(noisy.projection.sigma_1s > clean.projection.sigma_1s * 1.05);
    d.detection.rounds = 5;
    let voted = evaluate(&d, &EvalOptions::default()).unwrap();
    assert!(voted.projection.misread_ground_effective < 0.005);
    assert!(voted.cycle_time_s == noisy.cycle_time_s); // no detection segment here
}

/// Entanglement: squeezing by G dB lowers sigma by 10^(-G/20) (Phys. Rev. A 50, 67 (1994));
/// a GHZ state of N atoms in Ramsey reaches 1/(2 pi nu0 N T_R) sqrt(T_c/tau) (Heisenberg
/// scaling) and is N times more sensitive to laser phase.
#[test]
fn entanglement_gains() {
    let mut d = ramsey_design(5e14, 10, 0.2, 0.1);
    let base = evaluate(&d, &EvalOptions::default()).unwrap();
    d.atoms.entanglement = Entanglement::Squeezed { gain_db: 6.0 };
    let sq = evaluate(&d, &EvalOptions::default()).unwrap();
    assert!(rel(sq.projection.sigma_1s, base.projection.sigma_1s * 10f64.powf(-6.0 / 20.0)) < 1e-9);
    d.atoms.entanglement = Entanglement::Ghz;
    let ghz = evaluate(&d, &EvalOptions::default()).unwrap();
    let closed = 1.0 / (2.0 * PI * 5e14 * 10.0 * 0.2) * ghz.cycle_time_s.sqrt();
    assert!(rel(ghz.projection.sigma_1s, closed) < 1e-6, "{} vs {closed}", ghz.projection.sigma_1s);
    assert!(rel(ghz.limits.probe_phase_rms_rad, 10.0 * base.limits.probe_phase_rms_rad) < 1e-9);
}

/// Repeated detection rounds repeat the detection-labelled dead time.
#[test]
fn detection_rounds_add_dead_time() {
    let mut d = design(1e15, 1, vec![pulse(0.1, 1.0), Segment::Dead { label: DeadLabel::Detection, duration_s: 0.01 }], 0.05, white_laser(1e-17));
    let one = evaluate(&d, &EvalOptions::default()).unwrap().cycle_time_s;
    d.detection.rounds = 4;
    d.lock.attack_time_s = 2.0;
    let four = evaluate(&d, &EvalOptions::default()).unwrap().cycle_time_s;
    assert!(((four - one) - 0.03).abs() < 1e-12);
}
