//! Reach of a clock pair: the d_e conversion by hand and in natural units, the scaling of
//! the dark-matter reach with the campaign across the coherence time, the drift fit on
//! simulated ratios, chronometric levelling, and bad input.

mod common;

use clockwright_core::demo;
use clockwright_core::pair::*;
use clockwright_core::reach::*;
use common::*;
use std::f64::consts::PI;

fn demo_pair() -> PairDocument {
    demo::pairs().remove(0)
}

#[test]
fn d_e_conversion_by_hand_at_one_mass() {
    // Hand computation with CODATA 2018 constants (Rev. Mod. Phys. 93, 025010 (2021)) at
    // m = 1e-22 eV, rho = 0.4 GeV/cm^3 (formula: Phys. Rev. D 91, 015015 (2015), delta
    // alpha/alpha = d_e sqrt(4 pi G) phi, rho = m^2 phi0^2 / 2):
    //   rho_E = 0.4e9 * 1.602176634e-19 J * 1e6 /m^3    = 6.408706536e-5 J/m^3
    //   G rho_E / c^2 = 6.67430e-11 * 6.408706536e-5 / 299792458^2 = 4.759208e-32 s^-2
    //   sqrt(8 pi * 4.759208e-32)                        = 1.093672e-15 s^-1
    //   omega = 1e-22 * 1.602176634e-19 / 1.054571817e-34 = 1.519267e-7 s^-1
    //   A / d_e = 1.093672e-15 / 1.519267e-7              = 7.19868e-9
    let a = alpha_amplitude_per_d_e(1e-22, 0.4);
    assert!(rel(a, 7.19868e-9) < 2e-6, "{a}");
    // f = m c^2 / h = 1e-22 eV / 4.135667696e-15 eV s = 2.417989e-8 Hz.
    assert!(rel(field_frequency_hz(1e-22), 2.417989e-8) < 1e-6);
}

#[test]
fn d_e_conversion_is_dimensionally_consistent_with_natural_units() {
    // Dimensional check: the same amplitude in natural units (hbar = c = 1, GeV), with the
    // Planck mass M_Pl = sqrt(hbar c / G) and hbar c = 197.3269804 MeV fm (CODATA 2018):
    // A/d_e = sqrt(4 pi) sqrt(2 rho) / (m M_Pl), rho in GeV^4.
    let hbar_c_gev_cm: f64 = 197.326_980_4e-3 * 1e-13; // GeV cm
    let hbar_c_j_m = 1.054_571_817e-34 * 299_792_458.0;
    let planck_mass_kg = (hbar_c_j_m / 6.674_30e-11_f64).sqrt();
    let planck_gev = planck_mass_kg * 299_792_458.0_f64.powi(2) / 1.602_176_634e-19 / 1e9;
    let mut rng = Rng(11);
    for _ in 0..20 {
        let m_ev = rng.log_uniform(1e-24, 1e-14);
        let rho = rng.uniform(0.1, 3.0);
        let rho_gev4 = rho * hbar_c_gev_cm.powi(3);
        let natural = (4.0 * PI).sqrt() * (2.0 * rho_gev4).sqrt() / (m_ev * 1e-9 * planck_gev);
        let si = alpha_amplitude_per_d_e(m_ev, rho);
        assert!(rel(si, natural) < 1e-8, "{si} vs {natural}");
        // Scaling: sqrt(rho) and 1/m.
        assert!(rel(alpha_amplitude_per_d_e(m_ev, 4.0 * rho), 2.0 * si) < 1e-14);
        assert!(rel(alpha_amplitude_per_d_e(10.0 * m_ev, rho), si / 10.0) < 1e-14);
    }
}

/// A continuous campaign of `span` seconds: sessions of `len` back to back, full uptime.
fn with_campaign(mut p: PairDocument, span: f64, len: f64) -> PairDocument {
    p.campaign = Campaign { sessions: (span / len).round() as u32, session_length_s: len, spacing_s: len, uptime: 1.0, systematic_per_session: 0.0 };
    p
}

fn reach_at(p: &PairDocument, mass: f64, coherence_periods: f64) -> (f64, bool) {
    let o = ReachOptions { mass_min_ev: mass, mass_max_ev: mass * 1.000_001, mass_points: 2, coherence_periods, ..Default::default() };
    let r = reach(p, &o).unwrap();
    (r.dark_matter.d_e[0].unwrap(), r.dark_matter.within_coherence[0])
}

#[test]
fn dark_matter_reach_scales_with_the_campaign_on_both_sides_of_the_coherence_time() {
    // m = 1e-17 eV: f = 2.4e-3 Hz. With 1e6 periods the coherence time is 4.1e8 s: campaigns of
    // 1e6 s and 1e7 s are coherent and the reach improves as span^-1/2. With 1e3 periods
    // (4.1e5 s) campaigns of 1e7 s and 1e8 s are not, and it improves as span^-1/4.
    let m = 1e-17;
    let base = demo_pair();
    let (r1, c1) = reach_at(&with_campaign(base.clone(), 1e6, 1e4), m, 1e6);
    let (r2, c2) = reach_at(&with_campaign(base.clone(), 1e7, 1e4), m, 1e6);
    assert!(c1 && c2);
    assert!(rel(r1 / r2, 10f64.sqrt()) < 1e-3, "{}", r1 / r2);
    let (r3, c3) = reach_at(&with_campaign(base.clone(), 1e7, 1e4), m, 1e3);
    let (r4, c4) = reach_at(&with_campaign(base.clone(), 1e8, 1e4), m, 1e3);
    assert!(!c3 && !c4);
    assert!(rel(r3 / r4, 10f64.powf(0.25)) < 1e-3, "{}", r3 / r4);
    // The same campaign on both sides of the coherence time.
    let (r5, _) = reach_at(&with_campaign(base.clone(), 1e7, 1e4), m, 1e6);
    // r5 carries the stochastic factor z = 1/sqrt(-ln 0.95); r3 the incoherent N^(1/4),
    // N = span / (1e3 periods).
    let n = 1e7 * field_frequency_hz(m) / 1e3;
    assert!(rel(r5 / r3, 1.0 / (-(0.95f64).ln()).sqrt() / n.powf(0.25)) < 1e-9, "{}", r5 / r3);
}

#[test]
fn dark_matter_reach_is_finite_and_stated_over_the_whole_mass_range() {
    let r = reach(&demo_pair(), &ReachOptions::default()).unwrap();
    let dm = &r.dark_matter;
    assert_eq!(dm.mass_ev.len(), 101);
    assert!((dm.mass_ev[0] - 1e-24).abs() < 1e-36 && rel(dm.mass_ev[100], 1e-14) < 1e-12);
    for (i, d) in dm.d_e.iter().enumerate() {
        let d = d.unwrap_or_else(|| panic!("no reach at {}", dm.mass_ev[i]));
        assert!(d.is_finite() && d > 0.0);
        assert!(dm.ratio_amplitude[i].is_finite() && dm.k_effective[i] > 0.0);
    }
    // At low masses (slow oscillation, campaign shorter than a coherence time) K_eff is the
    // plain difference K_a - K_b.
    assert!(rel(dm.k_effective[40], r.drift.delta_k.unwrap().abs()) < 1e-6);
}

#[test]
fn simulated_ratio_with_an_injected_drift_is_recovered_within_its_uncertainty() {
    // Session means with the stated per-session uncertainty and an injected drift; the fit of
    // the stated model recovers it with pulls of unit spread.
    let mut p = demo_pair();
    p.campaign.systematic_per_session = 4e-18;
    let r = reach(&p, &ReachOptions { mass_points: 2, ..Default::default() }).unwrap();
    let sigma = r.drift.session_total;
    let times = p.campaign.session_centres_s();
    let stated = r.drift.ratio_drift_per_year.unwrap() / YEAR_S;
    let injected = 3e-17 / YEAR_S;
    let mut rng = Rng(31337);
    let gauss = |rng: &mut Rng| {
        let (u, v) = (rng.uniform(1e-300, 1.0), rng.uniform(0.0, 1.0));
        (-2.0 * u.ln()).sqrt() * (2.0 * PI * v).cos()
    };
    let trials = 2000;
    let (mut s1, mut s2) = (0.0, 0.0);
    for _ in 0..trials {
        let y: Vec<f64> = times.iter().map(|t| 1e-16 + injected * t + sigma * gauss(&mut rng)).collect();
        let (slope, err) = fit_line(&times, &y, &vec![sigma; times.len()]).unwrap();
        assert!(rel(err, stated) < 1e-12);
        let pull = (slope - injected) / err;
        s1 += pull;
        s2 += pull * pull;
    }
    let mean = s1 / trials as f64;
    let sd = (s2 / trials as f64 - mean * mean).sqrt();
    assert!(mean.abs() < 0.1, "{mean}");
    assert!((sd - 1.0).abs() < 0.06, "{sd}");
    // Slow twin of the slope uncertainty: the 2x2 normal matrix inverted by hand.
    let w = 1.0 / (sigma * sigma);
    let (s00, s01, s11) = times.iter().fold((0.0, 0.0, 0.0), |(a, b, c), t| (a + w, b + w * t, c + w * t * t));
    let var_slope = s00 / (s00 * s11 - s01 * s01);
    assert!(rel(var_slope.sqrt(), stated) < 1e-9);
    // The bound on alpha goes through |K_a - K_b|.
    assert!(rel(r.drift.alpha_drift_per_year.unwrap(), stated * YEAR_S / r.drift.delta_k.unwrap().abs()) < 1e-14);
}

#[test]
fn a_ratio_held_to_8e_17_over_a_year_with_k_differing_by_3_bounds_alpha_drift_to_about_2e_17() {
    // Common practice (a check of the drift formula, no source): two sessions a year apart
    // whose difference is known to 8e-17, with K_a - K_b = 3.
    let mut p = demo_pair();
    p.a.transition.k_alpha = Some(3.0);
    p.b.transition.k_alpha = Some(0.0);
    p.campaign = Campaign { sessions: 2, session_length_s: 86_400.0, spacing_s: YEAR_S, uptime: 0.8, systematic_per_session: 8e-17 / 2f64.sqrt() };
    let r = reach(&p, &ReachOptions { mass_points: 2, ..Default::default() }).unwrap();
    let ratio = r.drift.ratio_drift_per_year.unwrap();
    assert!(rel(ratio, 8e-17) < 0.01, "{ratio}");
    let b = r.drift.alpha_drift_per_year.unwrap();
    assert!(b > 1.5e-17 && b < 3e-17, "{b}");
}

#[test]
fn identical_k_unknown_k_and_one_session_say_no_sensitivity() {
    let opt = ReachOptions { mass_points: 5, ..Default::default() };
    let mut p = demo_pair();
    p.a.transition.k_alpha = Some(0.5);
    p.b.transition.k_alpha = Some(0.5);
    let r = reach(&p, &opt).unwrap();
    assert_eq!(r.drift.alpha_drift_per_year, None);
    assert!(r.drift.note.contains("no sensitivity"), "{}", r.drift.note);
    assert!(r.dark_matter.d_e.iter().all(|d| d.is_none()));
    assert!(r.dark_matter.note.contains("No sensitivity"));
    assert!(r.drift.ratio_drift_per_year.unwrap().is_finite(), "the ratio's own drift is still bounded");
    let mut q = demo_pair();
    q.b.transition.species = None;
    let r = reach(&q, &opt).unwrap();
    assert_eq!(r.drift.alpha_drift_per_year, None);
    assert!(r.dark_matter.d_e.iter().all(|d| d.is_none()));
    let mut s = demo_pair();
    s.campaign.sessions = 1;
    let r = reach(&s, &opt).unwrap();
    assert_eq!(r.drift.ratio_drift_per_year, None);
    assert!(r.drift.note.contains("One session"));
    // Everything else stays finite.
    let v = serde_json::to_string(&r).unwrap();
    assert!(!v.contains("NaN") && !v.contains("inf"));
}

#[test]
fn bad_reach_input_is_a_clear_error() {
    let mut p = demo_pair();
    p.campaign.uptime = 0.0;
    let e = reach(&p, &ReachOptions::default()).unwrap_err();
    assert!(e.problems.iter().any(|x| x.path == "pair.campaign.uptime"), "{e}");
    // Uptime leaving less than one cycle of data per session.
    let mut q = demo_pair();
    q.campaign.session_length_s = 1.0;
    q.campaign.uptime = 0.1;
    let e = reach(&q, &ReachOptions::default()).unwrap_err();
    assert!(e.problems[0].path == "pair.campaign.uptime" && e.problems[0].allowed.contains("one comparison cycle"), "{e}");
    // Masses outside 1e-24 .. 1e-14 eV.
    for (lo, hi) in [(1e-25, 1e-14), (1e-24, 1e-13), (1e-20, 1e-21), (f64::NAN, 1e-14)] {
        let o = ReachOptions { mass_min_ev: lo, mass_max_ev: hi, ..Default::default() };
        let e = reach(&demo_pair(), &o).unwrap_err();
        assert!(e.problems.iter().all(|x| x.path.starts_with("options.mass_")), "{e}");
    }
    let o = ReachOptions { rho_dm_gev_per_cm3: 0.0, stochastic_confidence: 0.3, mass_points: 1, height_target_m: -1.0, ..Default::default() };
    let e = reach(&demo_pair(), &o).unwrap_err();
    for path in ["options.rho_dm_gev_per_cm3", "options.stochastic_confidence", "options.mass_points", "options.height_target_m"] {
        assert!(e.problems.iter().any(|x| x.path == path), "{path} missing in {e}");
    }
}

#[test]
fn one_part_in_1e18_is_about_one_centimetre() {
    // Common practice: 1e-18 of fractional frequency corresponds to about 1 cm of height.
    let h = 299_792_458.0f64.powi(2) * 1e-18 / STANDARD_GRAVITY_M_S2;
    assert!(h > 0.008 && h < 0.011, "{h}");
    let r = reach(&demo_pair(), &ReachOptions { mass_points: 2, ..Default::default() }).unwrap();
    let pe = evaluate_pair(&demo_pair(), &PairOptions::default()).unwrap();
    let lv = &r.levelling;
    for (i, &tau) in lv.tau_s.iter().enumerate() {
        assert!(rel(tau, pe.tau_s[i]) < 1e-15);
        assert!(rel(lv.height_m[i], 299_792_458.0f64.powi(2) * pe.total[i] / STANDARD_GRAVITY_M_S2) < 1e-14);
    }
    let t = lv.time_to_target_s.unwrap();
    let (ratio, _, _) = Ratio::prepare(&demo_pair()).unwrap();
    let sigma_t = ratio.at(&[t]).unwrap()[0].total.sqrt();
    assert!(rel(299_792_458.0f64.powi(2) * sigma_t / STANDARD_GRAVITY_M_S2, 0.01) < 1e-6);
    // A target the ratio never reaches.
    let r = reach(&demo_pair(), &ReachOptions { mass_points: 2, height_target_m: 1e-6, ..Default::default() }).unwrap();
    assert_eq!(r.levelling.time_to_target_s, None);
    assert!(r.levelling.note.contains("stays above"));
}

#[test]
fn probe_response_matches_brute_force_sampling_of_g() {
    // Slow twin: R(f) = int g(t) exp(-2 pi i f t) dt / int g dt by the midpoint rule on
    // 200 000 samples of g(t), for the demo designs at random modulation frequencies.
    use clockwright_core::projection::{operating_point, Readout};
    use clockwright_core::sensitivity::SensitivityFunction;
    use clockwright_core::sequence::Probe;
    let mut rng = Rng(4242);
    for d in demo::designs() {
        let probe = Probe::from_design(&d);
        let op = operating_point(&probe, &Readout::from_design(&d), d.lock.operating_point).unwrap();
        let gf = SensitivityFunction::new(&probe, op.detuning_hz).unwrap();
        let n = 200_000;
        let t = gf.cycle_s;
        let samples: Vec<(f64, f64)> = (0..n).map(|k| (k as f64 + 0.5) / n as f64 * t).map(|x| (x, gf.at(x))).collect();
        let g_int: f64 = samples.iter().map(|s| s.1).sum();
        for _ in 0..4 {
            let f = rng.log_uniform(1e-3, 5.0) / t;
            let got = probe_response(&gf, f);
            let (mut re, mut im) = (0.0, 0.0);
            for &(x, g) in &samples {
                re += g * (2.0 * PI * f * x).cos();
                im -= g * (2.0 * PI * f * x).sin();
            }
            let (re, im) = (re / g_int, im / g_int);
            assert!((got.re - re).abs() < 1e-6 && (got.im - im).abs() < 1e-6, "{} f={f}: {got} vs {re} {im}", d.name);
        }
    }
}
