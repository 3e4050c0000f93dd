//! Comparisons of two clocks: ratio budgets against the single-clock engine, the
//! differential Dick sum against Parseval's theorem on brute-force samples of g(t), the
//! correlation-spectroscopy model against a Monte Carlo of the read-outs, and bad input.

mod common;

use clockwright_core::budget::locked_variances;
use clockwright_core::design::Design;
use clockwright_core::noise::NoiseTerm;
use clockwright_core::pair::*;
use clockwright_core::projection::{operating_point, Readout};
use clockwright_core::sensitivity::SensitivityFunction;
use clockwright_core::sequence::Probe;
use clockwright_core::{demo, evaluate, EvalOptions};
use common::*;
use std::f64::consts::PI;

fn demo_pair() -> PairDocument {
    demo::pairs().remove(0)
}

fn campaign(len: f64) -> Campaign {
    Campaign { sessions: 3, session_length_s: len, spacing_s: 2.0 * len, uptime: 0.8, systematic_per_session: 0.0 }
}

fn pair(a: Design, b: Design, comparison: Comparison) -> PairDocument {
    PairDocument { schema_version: 1, name: "test pair".into(), a, b, comparison, link: None, campaign: campaign(86_400.0) }
}

#[test]
fn demo_pair_is_valid_round_trips_exactly_and_evaluates() {
    assert_eq!(demo::pairs().len(), demo::PAIR_FILES.len());
    for (name, text) in demo::PAIR_FILES {
        let p = PairDocument::from_json(text).unwrap_or_else(|e| panic!("{name}: {e}"));
        p.validate().unwrap_or_else(|e| panic!("{name}: {e}"));
        assert_eq!(PairDocument::from_json(&p.to_json()).unwrap(), p, "{name}");
        let e = evaluate_pair(&p, &PairOptions::default()).unwrap();
        assert!(e.total.iter().chain(&e.mod_total).all(|x| x.is_finite() && *x > 0.0));
        assert!(e.parts.iter().all(|p| p.sigma.iter().all(|x| x.is_finite())));
        assert!(e.delta_k.unwrap().abs() > 1.0, "the demo pair compares transitions of different K");
    }
}

#[test]
fn independent_lasers_add_the_two_single_clock_budgets() {
    // Slow twin: the single-clock engine's own curves at its own averaging times.
    let mut p = demo_pair();
    p.link = None;
    let (ratio, _, _) = Ratio::prepare(&p).unwrap();
    let ea = evaluate(&p.a, &EvalOptions::default()).unwrap();
    let eb_at = locked_variances(&p.b, &ea.curve.tau_s).unwrap();
    let pts = ratio.at(&ea.curve.tau_s).unwrap();
    for (i, pt) in pts.iter().enumerate() {
        let want = ea.curve.total[i] * ea.curve.total[i] + eb_at[i].0.iter().sum::<f64>();
        assert!(rel(pt.total, want) < 1e-12, "tau {}: {} vs {}", ea.curve.tau_s[i], pt.total, want);
        let want_mod = ea.curve.mod_total[i] * ea.curve.mod_total[i] + eb_at[i].1;
        assert!(rel(pt.modified, want_mod) < 1e-12);
    }
}

#[test]
fn checkpoints_of_independent_lasers_add_the_single_clock_checkpoints_in_variance() {
    // Slow twin: each clock's own evaluation at 1 s, 1000 s and one day; independent noise adds
    // in variance (IEEE Std 1139-2008). The height checkpoints are c^2 sigma/g of the same points.
    let mut p = demo_pair();
    p.link = None;
    let e = evaluate_pair(&p, &PairOptions::default()).unwrap();
    let ea = evaluate(&p.a, &EvalOptions::default()).unwrap();
    let eb = evaluate(&p.b, &EvalOptions::default()).unwrap();
    assert_eq!(e.checkpoints.len(), 3);
    let r = clockwright_core::reach::reach(&p, &clockwright_core::reach::ReachOptions { mass_points: 3, ..Default::default() }).unwrap();
    for (k, c) in e.checkpoints.iter().enumerate() {
        assert_eq!(c.tau_s, ea.checkpoints[k].tau_s);
        let want = libm::sqrt(ea.checkpoints[k].total * ea.checkpoints[k].total + eb.checkpoints[k].total * eb.checkpoints[k].total);
        let got = c.sigma.unwrap();
        assert!(rel(got, want) < 1e-12, "tau {}: {got} vs {want}", c.tau_s);
        let h = r.levelling.checkpoints[k].height_m.unwrap();
        assert!(rel(h, 299_792_458.0f64.powi(2) * got / 9.806_65) < 1e-12, "height at {} s: {h}", c.tau_s);
    }
    // Below one comparison cycle there is no Allan deviation: no number, never NaN.
    let mut slow = demo_pair();
    for seg in slow.a.sequence.segments.iter_mut().chain(slow.b.sequence.segments.iter_mut()) {
        if let clockwright_core::design::Segment::Dead { duration_s, .. } = seg {
            *duration_s *= 40.0;
        }
    }
    let e = evaluate_pair(&slow, &PairOptions::default()).unwrap();
    assert!(e.cycle_time_s > 1.0, "cycle {}", e.cycle_time_s);
    assert_eq!(e.checkpoints[0].sigma, None);
    assert!(e.checkpoints[1].sigma.unwrap().is_finite());
}

#[test]
fn link_noise_adds_its_own_allan_variance() {
    let mut p = demo_pair();
    p.link = None;
    let without = Ratio::prepare(&p).unwrap().0.at(&[1.0, 100.0, 1e4]).unwrap();
    p.link = Some(Link { label: String::new(), noise: vec![NoiseTerm::WhiteFrequency { sigma_y_1s: 3e-17 }], high_cutoff_hz: 1e3 });
    let with = Ratio::prepare(&p).unwrap().0.at(&[1.0, 100.0, 1e4]).unwrap();
    for (k, tau) in [1.0, 100.0, 1e4].iter().enumerate() {
        // White FM: sigma^2 = sigma_1s^2 / tau; mod sigma^2 = sigma_1s^2 / (2 tau) (IEEE Std 1139-2008).
        assert!(rel(with[k].total - without[k].total, 9e-34 / tau) < 1e-9);
        assert!(rel(with[k].modified - without[k].modified, 4.5e-34 / tau) < 1e-3);
    }
}

/// Slow twin of the differential Dick sum for a white-FM laser: by Parseval's theorem
/// sum_{m>=1} |u_m|^2 = ((1/T) int u^2 dt - u_0^2)/2 for real u = g_a/g_a0 - g_b/g_b0, whose
/// mean u_0 is 0, so D = h0/2 (1/T) int u^2 dt, here by the midpoint rule on 400 000 samples.
fn parseval_differential(a: &Design, b: &Design, h0: f64) -> f64 {
    let gf = |d: &Design| {
        let probe = Probe::from_design(d);
        let op = operating_point(&probe, &Readout::from_design(d), d.lock.operating_point).unwrap();
        SensitivityFunction::new(&probe, op.detuning_hz).unwrap()
    };
    let (ga, gb) = (gf(a), gf(b));
    let t = ga.cycle_s;
    let n = 400_000;
    let (mut sa, mut sb, mut samples) = (0.0, 0.0, Vec::with_capacity(n));
    for k in 0..n {
        let x = (k as f64 + 0.5) / n as f64 * t;
        let (u, v) = (ga.at(x), gb.at(x));
        sa += u;
        sb += v;
        samples.push((u, v));
    }
    let (a0, b0) = (sa / n as f64, sb / n as f64);
    let mean_sq: f64 = samples.iter().map(|(u, v)| (u / a0 - v / b0) * (u / a0 - v / b0)).sum::<f64>() / n as f64;
    h0 / 2.0 * mean_sq
}

#[test]
fn shared_laser_differential_dick_matches_parseval_on_random_sequences() {
    let mut rng = Rng(0x5eed_0042);
    for case in 0..6 {
        let sigma = rng.log_uniform(1e-16, 1e-14);
        let cycle = rng.uniform(0.3, 1.5);
        // Two sequences of the same cycle: a Rabi pulse and a Ramsey pair, placed differently.
        let ta = rng.uniform(0.05, 0.5) * cycle;
        let tb_pulse = rng.uniform(0.005, 0.02);
        let tb_free = rng.uniform(0.05, 0.4) * cycle;
        let a = design(4e14, 1000, vec![pulse(ta, 1.0)], cycle - ta, white_laser(sigma));
        let b_probe = 2.0 * tb_pulse + tb_free;
        let b = design(5e14, 1, vec![pulse(tb_pulse, 0.5), clockwright_core::design::Segment::Free { duration_s: tb_free }, pulse(tb_pulse, 0.5)], cycle - b_probe, white_laser(sigma));
        let p = pair(a.clone(), b.clone(), Comparison::SharedLaser);
        let e = evaluate_pair(&p, &PairOptions::default()).unwrap();
        let s = e.shared.clone().unwrap();
        let want = parseval_differential(&a, &b, 2.0 * sigma * sigma);
        let got = s.dick_differential_1s * s.dick_differential_1s;
        assert!(rel(got, want) < 2e-3, "case {case}: {got} vs {want} (harmonics {})", s.harmonics_summed);
        // The ratio is white: sigma^2(tau) tau = QPN_a^2 + QPN_b^2 + D.
        let total1 = s.projection_a_1s.powi(2) + s.projection_b_1s.powi(2) + got;
        for (tau, sig) in e.tau_s.iter().zip(&e.total) {
            assert!(rel(sig * sig * tau, total1) < 1e-12);
        }
    }
}

#[test]
fn shared_laser_cancels_the_dick_effect_of_identical_sequences() {
    let a = demo::designs()[2].clone();
    let p = pair(a.clone(), a.clone(), Comparison::SharedLaser);
    let s = evaluate_pair(&p, &PairOptions::default()).unwrap().shared.unwrap();
    assert_eq!(s.dick_differential_1s, 0.0);
    assert!(s.dick_a_alone_1s > 1e-17, "the single clock does have a Dick effect");
    assert!(rel(s.projection_a_1s, s.projection_b_1s) < 1e-15);
}

#[test]
fn shared_laser_needs_one_cycle() {
    let p = pair(demo::designs()[0].clone(), demo::designs()[2].clone(), Comparison::SharedLaser);
    let e = p.validate().unwrap_err();
    assert!(e.problems.iter().any(|p| p.path == "pair.comparison" && p.allowed.contains("same cycle")), "{e}");
    assert!(evaluate_pair(&p, &PairOptions::default()).is_err());
}

/// A single-ion (or N-atom) design with a short Rabi pulse and no dead time.
fn ion(nu0: f64, atoms: u64, lifetime_s: Option<f64>, laser_sigma: f64) -> Design {
    let mut d = design(nu0, atoms, vec![pulse(1e-3, 1.0)], 0.0, white_laser(laser_sigma));
    d.transition.lifetime_s = lifetime_s;
    d
}

#[test]
fn correlation_ratio_does_not_depend_on_the_laser_noise() {
    // Property test (issue 4): with two ions and one noisy laser the ratio's instability does
    // not depend on the laser's noise level.
    let mut rng = Rng(77);
    let reference = {
        let p = pair(ion(1.121e15, 1, Some(20.6), 1e-15), ion(1.121e15, 1, Some(20.6), 1e-15), Comparison::Correlation { dark_time_s: 5.0 });
        evaluate_pair(&p, &PairOptions::default()).unwrap()
    };
    for _ in 0..8 {
        let s1 = rng.log_uniform(1e-17, 1e-13);
        let s2 = rng.log_uniform(1e-17, 1e-13);
        let mut a = ion(1.121e15, 1, Some(20.6), s1);
        a.laser.noise.push(NoiseTerm::FlickerFloor { sigma_y: s2 });
        let p = pair(a.clone(), ion(1.121e15, 1, Some(20.6), s2), Comparison::Correlation { dark_time_s: 5.0 });
        let e = evaluate_pair(&p, &PairOptions::default()).unwrap();
        assert_eq!(e.total, reference.total);
        assert_eq!(e.mod_total, reference.mod_total);
    }
    // The same clocks with independent lasers do depend on it (so the property is not vacuous).
    let at_1s = |sigma: f64| {
        let q = pair(ion(1.121e15, 1, Some(20.6), sigma), ion(1.121e15, 1, Some(20.6), sigma), Comparison::IndependentLasers);
        Ratio::prepare(&q).unwrap().0.at(&[1.0]).unwrap()[0].total
    };
    assert!(at_1s(1e-13) > 2.0 * at_1s(1e-15));
}

#[test]
fn correlation_approaches_the_lifetime_limit() {
    // One ion each, no dead time, equal lifetimes tau_e: the optimum dark time is tau_e/2 and
    // sigma_y(1 s) = 2 sqrt(e) / (2 pi nu0 sqrt(tau_e/2)) (module documentation; one ion each as
    // in Phys. Rev. Lett. 125, 243602 (2020)).
    let nu0 = 1.121015393207857e15;
    let tau_e = 20.6;
    let p = pair(ion(nu0, 1, Some(tau_e), 1e-15), ion(nu0, 1, Some(tau_e), 1e-15), Comparison::Correlation { dark_time_s: 3.0 });
    let c = evaluate_pair(&p, &PairOptions::default()).unwrap().correlation.unwrap();
    let limit = 2.0 * libm::sqrt(std::f64::consts::E) / (2.0 * PI * nu0 * libm::sqrt(tau_e / 2.0));
    assert!(rel(c.sigma_1s_at_optimum.unwrap(), limit) < 1e-9, "{:?} vs {limit}", c.sigma_1s_at_optimum);
    assert!(rel(c.optimum_dark_time_s.unwrap(), tau_e / 2.0) < 1e-4, "{:?}", c.optimum_dark_time_s);
    // Shorter dark times are farther from the limit.
    assert!(c.sigma_1s > limit);
    // Without decay there is no optimum and the instability keeps falling with T.
    let q = pair(ion(nu0, 1, None, 1e-15), ion(nu0, 1, None, 1e-15), Comparison::Correlation { dark_time_s: 3.0 });
    assert_eq!(evaluate_pair(&q, &PairOptions::default()).unwrap().correlation.unwrap().optimum_dark_time_s, None);
}

#[test]
fn correlation_product_variance_matches_a_monte_carlo_of_the_read_outs() {
    // Slow twin: draw the common laser phase uniformly, each atom's +-1 outcome with
    // P(+1) = (1 + C cos(phase))/2, and take the sample mean and variance of X Y.
    let mut rng = Rng(2024);
    for &(na, nb) in &[(1u32, 1u32), (1, 4), (3, 10), (20, 20)] {
        let ca = rng.uniform(0.4, 1.0);
        let cb = rng.uniform(0.4, 1.0);
        let shots = 200_000;
        let draw = |n: u32, c: f64, phase: f64, rng: &mut Rng| -> f64 {
            let p = 0.5 * (1.0 + c * phase.cos());
            (0..n).map(|_| if rng.uniform(0.0, 1.0) < p { 1.0 } else { -1.0 }).sum::<f64>() / n as f64
        };
        let (mut s, mut s2, mut s0) = (0.0, 0.0, 0.0);
        for _ in 0..shots {
            let th = rng.uniform(0.0, 2.0 * PI);
            let x = draw(na, ca, th, &mut rng);
            let y = draw(nb, cb, th + PI / 2.0, &mut rng);
            s += x * y;
            s2 += x * y * x * y;
            // Operating point check: at zero difference phase E[XY] = C_a C_b / 2.
            let x0 = draw(na, ca, th, &mut rng);
            let y0 = draw(nb, cb, th, &mut rng);
            s0 += x0 * y0;
        }
        let n = shots as f64;
        let mean = s / n;
        let var = s2 / n - mean * mean;
        let want = correlation_product_variance(ca, cb, na as f64, nb as f64);
        assert!(rel(var, want) < 0.02, "N = ({na}, {nb}): {var} vs {want}");
        assert!(mean.abs() < 5.0 * libm::sqrt(want / n));
        assert!((s0 / n - ca * cb / 2.0).abs() < 5.0 * libm::sqrt(1.0 / n));
    }
}

#[test]
fn correlation_needs_the_same_transition_and_a_sane_dark_time() {
    let p = pair(ion(1.121e15, 1, Some(20.6), 1e-15), ion(6.42e14, 1, None, 1e-15), Comparison::Correlation { dark_time_s: 1e6 });
    let e = p.validate().unwrap_err();
    assert!(e.problems.iter().any(|p| p.path == "pair.comparison" && p.allowed.contains("same transition")), "{e}");
    assert!(e.problems.iter().any(|p| p.path == "pair.comparison.dark_time_s"), "{e}");
}

#[test]
fn bad_pair_input_names_paths_and_never_panics() {
    let mut p = demo_pair();
    p.b.atoms.count = 0;
    p.campaign.uptime = 0.0;
    p.campaign.sessions = 0;
    p.campaign.systematic_per_session = f64::NAN;
    let e = p.validate().unwrap_err();
    for path in ["pair.b.atoms.count", "pair.campaign.uptime", "pair.campaign.sessions", "pair.campaign.systematic_per_session"] {
        assert!(e.problems.iter().any(|x| x.path == path), "{path} missing in {e}");
    }
    assert!(e.to_string().contains("pair.campaign.uptime: 0;"), "{e}");
    // A session shorter than one cycle.
    let mut q = demo_pair();
    q.campaign.session_length_s = 0.1;
    let e = q.validate().unwrap_err();
    assert!(e.problems.iter().any(|x| x.path == "pair.campaign.session_length_s" && x.allowed.contains("one cycle")), "{e}");
    // Overlapping sessions and an unknown field.
    let mut r = demo_pair();
    r.campaign.spacing_s = 10.0;
    assert!(r.validate().unwrap_err().problems.iter().any(|x| x.path == "pair.campaign.spacing_s"));
    let mut v: serde_json::Value = serde_json::from_str(demo::PAIR_FILES[0].1).unwrap();
    v["campaign"]["uptme"] = serde_json::json!(0.5);
    let e = PairDocument::from_value(v).unwrap_err();
    assert!(e.problems[0].path.starts_with("pair.campaign"), "{e}");
    assert!(PairDocument::from_json("[1, 2]").is_err());
    assert!(PairDocument::from_json("not json").is_err());
    // Options.
    let o = PairOptions { tau_points: 1, tau_max_s: 0.01 };
    let e = evaluate_pair(&demo_pair(), &o).unwrap_err();
    assert!(e.problems.iter().any(|x| x.path == "options.tau_points"));
    assert!(e.problems.iter().any(|x| x.path == "options.tau_max_s"));
}
