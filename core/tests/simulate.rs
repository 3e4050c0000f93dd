//! The cycle-by-cycle simulation: the binomial sampler against exact probabilities, the
//! streamed laser noise against the IEEE Std 1139-2008 closed forms, the closed loop against
//! the analytic budget and against Probe::excitation (slow twin), the servo's step response,
//! fringe hops, reproducibility and bad input.

use clockwright_core::demo;
use clockwright_core::design::Design;
use clockwright_core::estimate::{chi2_quantile, estimate, Estimator, Options, Series, Taus};
use clockwright_core::noise::Spectrum;
use clockwright_core::projection::{operating_point, Readout};
use clockwright_core::sequence::Probe;
use clockwright_core::simulate::*;
use clockwright_core::synthesis::Rng;
use std::f64::consts::PI;

// ---------------------------------------------------------------------------------------
// Binomial sampler

/// Exact Binomial(n, p) probabilities over k in [lo, hi] by the obvious ratio recursion
/// P(k+1)/P(k) = (n-k)/(k+1) p/(1-p), started at the mode and normalised over the range
/// (the range covers all but a negligible tail).
fn binomial_pmf(n: u64, p: f64, lo: u64, hi: u64) -> Vec<f64> {
    let mode = (((n + 1) as f64 * p).floor() as u64).clamp(lo, hi);
    let mut w = vec![0.0; (hi - lo + 1) as usize];
    w[(mode - lo) as usize] = 1.0;
    let r = p / (1.0 - p);
    for k in mode..hi {
        w[(k + 1 - lo) as usize] = w[(k - lo) as usize] * (n - k) as f64 / (k + 1) as f64 * r;
    }
    for k in (lo..mode).rev() {
        w[(k - lo) as usize] = w[(k + 1 - lo) as usize] * (k + 1) as f64 / (n - k) as f64 / r;
    }
    let s: f64 = w.iter().sum();
    w.iter().map(|v| v / s).collect()
}

/// Mean and variance within 5 standard errors of n p and n p (1-p) (the variance's standard
/// error from the binomial fourth central moment n p q (1 + 3 (n-2) p q)), and Pearson's
/// chi-square goodness of fit against the exact probabilities (bins merged to at least 5
/// expected counts; critical value at 0.999 from estimate::chi2_quantile, itself checked
/// against scipy in tests/estimate.rs). Common practice for testing a sampler.
#[test]
fn binomial_sampler_matches_exact_probabilities() {
    let cases: [(u64, f64); 9] = [(1, 0.3), (7, 0.5), (16, 0.2), (17, 0.2), (40, 0.9), (3000, 0.37), (100_000, 0.01), (100_000_000, 0.5), (100_000_000, 2e-7)];
    let draws = 20_000usize;
    let mut rng = Rng::new(12345);
    for (n, p) in cases {
        let ks: Vec<u64> = (0..draws).map(|_| binomial(&mut rng, n, p)).collect();
        assert!(ks.iter().all(|&k| k <= n));
        let nf = n as f64;
        let q = 1.0 - p;
        let mean = ks.iter().map(|&k| k as f64).sum::<f64>() / draws as f64;
        let var = ks.iter().map(|&k| (k as f64 - mean) * (k as f64 - mean)).sum::<f64>() / (draws - 1) as f64;
        let (m_exp, v_exp) = (nf * p, nf * p * q);
        assert!((mean - m_exp).abs() < 5.0 * (v_exp / draws as f64).sqrt(), "n {n} p {p}: mean {mean} expected {m_exp}");
        let mu4 = nf * p * q * (1.0 + 3.0 * (nf - 2.0) * p * q);
        let se_var = ((mu4 - v_exp * v_exp).max(0.0) / draws as f64).sqrt();
        assert!((var - v_exp).abs() < 5.0 * se_var + 1e-12, "n {n} p {p}: variance {var} expected {v_exp}");
        // Chi-square over the range mean +- 8 sigma (plus the two tails as bins).
        let sd = v_exp.sqrt();
        let lo = (m_exp - 8.0 * sd - 1.0).max(0.0) as u64;
        let hi = ((m_exp + 8.0 * sd + 1.0) as u64).min(n);
        let pmf = binomial_pmf(n, p, lo, hi);
        let mut observed = vec![0.0; pmf.len()];
        for &k in &ks {
            assert!(k >= lo && k <= hi, "n {n} p {p}: draw {k} beyond 8 sigma");
            observed[(k - lo) as usize] += 1.0;
        }
        let (mut chi2, mut bins) = (0.0, 0usize);
        let (mut e_acc, mut o_acc) = (0.0, 0.0);
        for (e, o) in pmf.iter().zip(&observed) {
            e_acc += e * draws as f64;
            o_acc += o;
            if e_acc >= 5.0 {
                chi2 += (o_acc - e_acc) * (o_acc - e_acc) / e_acc;
                bins += 1;
                e_acc = 0.0;
                o_acc = 0.0;
            }
        }
        if e_acc > 0.0 {
            chi2 += (o_acc - e_acc) * (o_acc - e_acc) / e_acc.max(1e-300);
            bins += 1;
        }
        if bins >= 2 {
            let crit = chi2_quantile(0.999, (bins - 1) as f64).unwrap();
            assert!(chi2 < crit, "n {n} p {p}: chi-square {chi2} over {bins} bins exceeds {crit}");
        }
    }
}

// ---------------------------------------------------------------------------------------
// Streamed laser noise against IEEE Std 1139-2008

/// Allan deviation of the streamed free laser (cycle averages) for one power law, and the
/// closed form sigma_y^2(tau) of IEEE Std 1139-2008: white FM h0/(2 tau), flicker FM
/// 2 ln2 h_-1, random-walk FM (2 pi^2/3) h_-2 tau, white PM 3 f_h h2/(4 pi^2 tau^2).
/// The closed form must lie in the 99 % interval of every octave point up to a sixteenth of
/// the record, with the EDF for the known noise type.
#[test]
fn streamed_free_laser_matches_ieee_1139_closed_forms() {
    let layout = [0.01, 0.05, 0.01, 0.13];
    let cycle: f64 = layout.iter().sum();
    let n = 200_000usize;
    let f_h = 1e3;
    let cases: [(i32, f64); 4] = [(0, 2e-32), (-1, 1e-32), (-2, 1e-34), (2, 1e-36)];
    for (alpha, h) in cases {
        let spec = Spectrum::power_laws(&[(alpha, h)], f_h);
        let mut s = LaserStream::new(&spec, 0.0, &layout, n as f64 * cycle, 77 + alpha as u64).unwrap();
        let mut out = vec![0.0; layout.len()];
        let y: Vec<f64> = (0..n)
            .map(|_| {
                s.next_cycle(&mut out);
                out.iter().sum::<f64>() / cycle
            })
            .collect();
        // 14 octave taus for each of 4 laws: each point at 1 - 0.01/56, so that all 56 hold
        // together with probability 0.99 (Bonferroni correction, common practice); at 0.99
        // per point a correct stream fails somewhere about 40 % of the time.
        let e = estimate(Series::Frequency(&y), cycle, Estimator::Allan, &Options { taus: Taus::Octave, confidence: 1.0 - 0.01 / 56.0, alpha: Some(alpha) }).unwrap();
        assert_eq!(e.points.iter().filter(|p| p.m <= (n / 16) as u64).count(), 14);
        for p in e.points.iter().filter(|p| p.m <= (n / 16) as u64) {
            let tau = p.tau_s;
            let var = match alpha {
                0 => h / (2.0 * tau),
                -1 => 2.0 * 2f64.ln() * h,
                -2 => 2.0 * PI * PI / 3.0 * h * tau,
                _ => 3.0 * f_h * h / (4.0 * PI * PI * tau * tau),
            };
            let want = var.sqrt();
            assert!(p.ci_low <= want && want <= p.ci_high, "alpha {alpha} tau {tau}: simulated {} [{}, {}], closed form {want}", p.deviation, p.ci_low, p.ci_high);
        }
    }
}

// ---------------------------------------------------------------------------------------
// The closed loop

fn demo_design(name: &str) -> Design {
    demo::designs().into_iter().find(|d| d.name == name).unwrap()
}

/// The demo designs whose laser phase excursion over the probe stays small (linear
/// response: the single ion and the octupole ion, 0.11 and 0.18 rad RMS) agree with the
/// analytic budget (budget.rs, the model checked in tests/dick.rs, tests/allan.rs) at every
/// octave tau, within the flag interval of simulate.rs.
#[test]
fn demo_designs_with_linear_response_match_the_analytic_curve() {
    for name in ["Fernhollow ion, single", "Fernhollow octupole ion"] {
        let d = demo_design(name);
        let r = simulate(&d, &SimOptions { cycles: 60_000, seed: 4, ..Default::default() }).unwrap();
        assert!(r.fringe.analytic_phase_rms_rad < 0.2, "{name}");
        assert_eq!(r.fringe.phase_excursion_cycles, 0, "{name}");
        assert_eq!(r.fringe.off_fringe_cycles, 0, "{name}");
        assert!(r.departures.is_empty(), "{name}: {:?}", r.departures);
        assert!(r.locked.points.len() >= 10);
        // And not by a wide interval: at the shortest tau the 68 % interval is within 2 %.
        let p0 = &r.locked.points[0];
        assert!((p0.ci_high - p0.ci_low) / p0.deviation < 0.02);
        // The long-tau end averages as white frequency noise at the level of the analytic
        // projection + Dick sum (the analytic curve there): within 25 % at tau = 2^10 cycles.
        let p = r.locked.points.iter().find(|p| p.m == 1024).unwrap();
        let a = r.analytic.total[10];
        assert!((p.deviation / a - 1.0).abs() < 0.25, "{name}: {} vs {a}", p.deviation);
    }
}

/// A Ramsey design whose free time is pushed well past the laser's coherence (3 s against
/// about 0.3 s for the room-temperature demo laser) hops fringes, and the departure is
/// flagged with that reason.
#[test]
fn ramsey_past_the_laser_coherence_hops_fringes_and_is_flagged() {
    let mut d = demo_design("Fernhollow ion, string of four");
    d.sequence.segments[3] = clockwright_core::design::Segment::Free { duration_s: 3.0 };
    d.lock.attack_time_s = 20.0;
    let r = simulate(&d, &SimOptions { cycles: 4000, seed: 9, ..Default::default() }).unwrap();
    assert!(r.fringe.analytic_phase_rms_rad > 3.0);
    assert!(r.fringe.phase_excursion_cycles > 100, "{:?}", r.fringe);
    assert!(r.fringe.off_fringe_cycles > 0, "{:?}", r.fringe);
    assert!(!r.departures.is_empty());
    assert!(r.departures.iter().all(|d| d.reason.starts_with("fringe hops")), "{:?}", r.departures);
    assert!(r.notes.iter().any(|n| n.contains("Fringe hops")));
}

/// Slow twin: with the laser noise and drift off and 1e8 atoms, every cycle's excitation equals
/// Probe::excitation at the probed detuning (side times the operating point plus the
/// servo's correction), for any number of pulse sub-steps, and the measured fraction is the
/// readout of it within 6 binomial standard deviations.
#[test]
fn noiseless_excitation_equals_probe_excitation_at_the_operating_points() {
    for name in ["Fernhollow ion, single", "Fernhollow ion, string of four", "Fernhollow octupole ion"] {
        let mut d = demo_design(name);
        d.atoms.count = 100_000_000;
        d.laser.drift_per_s = 0.0;
        let probe = Probe::from_design(&d);
        let ro = Readout::from_design(&d);
        let op = operating_point(&probe, &ro, d.lock.operating_point).unwrap();
        for subs in [1, 3] {
            let o = SimOptions { cycles: 16, settle_cycles: Some(0), laser_noise: false, pulse_substeps: subs, trace_cycles: 16, initial_offset_hz: 0.01 * op.edge_hz, ..Default::default() };
            let r = simulate(&d, &o).unwrap();
            assert_eq!(r.trace.len(), 16);
            for c in &r.trace {
                let nu = c.side as f64 * op.detuning_hz + c.correction_hz;
                let want = probe.excitation(nu);
                assert!((c.excitation - want).abs() < 1e-12, "{name} subs {subs} cycle {}: {} vs {want}", c.cycle, c.excitation);
                let pm = ro.measured(want);
                assert!((c.measured - pm).abs() < 6.0 * (pm * (1.0 - pm) / 1e8).sqrt() + 1e-12);
                assert!((c.error_hz - c.correction_hz).abs() < 1e-12 * c.correction_hz.abs().max(1e-3));
            }
        }
    }
}

/// The servo's step response follows the attack time: a frequency step decays as
/// exp(-t / T_s), the response of the budget's first-order loop H(f) = 1/(1 + i 2 pi f T_s)
/// (common practice), within 0.03 of the initial step (the sampled loop's
/// (1 - T_c/T_s)^n and its one-cycle delay).
#[test]
fn step_response_follows_the_attack_time() {
    let mut d = demo_design("Fernhollow ion, single");
    d.atoms.count = 100_000_000;
    d.lock.attack_time_s = 4.0;
    let cycle = d.cycle_time_s();
    let step = 0.05;
    let o = SimOptions { cycles: 400, settle_cycles: Some(0), laser_noise: false, initial_offset_hz: step, trace_cycles: 400, ..Default::default() };
    let r = simulate(&d, &o).unwrap();
    for c in r.trace.iter().step_by(10) {
        let t = c.cycle as f64 * cycle;
        let want = (-t / 4.0).exp();
        assert!((c.correction_hz / step - want).abs() < 0.03, "t {t}: {} vs {want}", c.correction_hz / step);
    }
}

/// A linear drift leaves a constant lag D T_s behind one integrator (budget.rs: servo lag,
/// common practice); a second integrator removes it.
#[test]
fn second_integrator_removes_the_drift_lag() {
    let mut d = demo_design("Fernhollow ion, single");
    d.atoms.count = 100_000_000;
    d.laser.drift_per_s = 1e-17;
    let nu0 = d.transition.frequency_hz;
    let t_s = d.lock.attack_time_s;
    let lag_hz = nu0 * 1e-17 * t_s;
    let run = |second: bool| {
        let o = SimOptions { cycles: 16, settle_cycles: Some(2000), laser_noise: false, second_integrator: second, trace_cycles: 2016, ..Default::default() };
        let r = simulate(&d, &o).unwrap();
        r.trace.last().unwrap().error_hz
    };
    let one = run(false);
    let two = run(true);
    assert!((one.abs() / lag_hz - 1.0).abs() < 0.1, "lag {one} vs {lag_hz}");
    assert!(two.abs() < 0.02 * lag_hz, "second integrator leaves {two}");
}

/// Same seed, same run, whether advanced at once or in chunks; another seed differs.
#[test]
fn runs_are_reproducible_and_chunking_does_not_matter() {
    let d = demo_design("Fernhollow ion, string of four");
    let o = SimOptions { cycles: 3000, seed: 21, ..Default::default() };
    let whole = simulate(&d, &o).unwrap();
    let mut s = Simulation::new(&d, &o).unwrap();
    let mut last = 0.0;
    loop {
        let p = s.advance(777);
        assert!(p.fraction >= last && p.fraction <= 1.0);
        last = p.fraction;
        if p.finished {
            break;
        }
    }
    assert_eq!(s.finish().unwrap(), whole);
    let other = simulate(&d, &SimOptions { seed: 22, ..o }).unwrap();
    assert_ne!(other.locked.points[0].deviation, whole.locked.points[0].deviation);
}

#[test]
fn bad_options_and_early_finish_are_clear_errors() {
    let d = demo_design("Fernhollow ion, single");
    let err = |o: SimOptions| Simulation::new(&d, &o).unwrap_err();
    let e = err(SimOptions { cycles: 0, ..Default::default() });
    assert_eq!(e.problems[0].path, "options.cycles");
    let e = err(SimOptions { cycles: u64::MAX, ..Default::default() });
    assert!(e.problems[0].allowed.contains(&MAX_CYCLES.to_string()), "{e}");
    assert_eq!(err(SimOptions { seed: u64::MAX, ..Default::default() }).problems[0].path, "options.seed");
    let e = err(SimOptions { pulse_substeps: 0, ..Default::default() });
    assert_eq!(e.problems[0].path, "options.pulse_substeps");
    let e = err(SimOptions { initial_offset_hz: f64::NAN, confidence: 2.0, ..Default::default() });
    assert_eq!(e.problems.len(), 2);
    // Too much work: cycles times intervals beyond the cap.
    let e = err(SimOptions { cycles: MAX_CYCLES, pulse_substeps: MAX_PULSE_SUBSTEPS, ..Default::default() });
    assert!(e.to_string().contains("intervals"), "{e}");
    // An invalid design is refused with its field path.
    let mut bad = d.clone();
    bad.atoms.count = 0;
    assert_eq!(Simulation::new(&bad, &SimOptions::default()).unwrap_err().problems[0].path, "atoms.count");
    // Unknown option fields are refused by the parser.
    assert!(serde_json::from_str::<SimOptions>(r#"{"cycle": 5}"#).is_err());
    // Finishing before enough cycles are recorded.
    let mut s = Simulation::new(&d, &SimOptions { cycles: 100, ..Default::default() }).unwrap();
    s.advance(3);
    let e = s.finish().unwrap_err();
    assert_eq!(e.problems[0].path, "cycles");
    // Ending early after settling gives a result with a note.
    let mut s = Simulation::new(&d, &SimOptions { cycles: 1000, settle_cycles: Some(10), ..Default::default() }).unwrap();
    s.advance(500);
    let r = s.finish().unwrap();
    assert_eq!(r.cycles, 490);
    assert!(r.notes[0].contains("ended early"));
}

/// Every number of a run is finite, for a GHZ design, a squeezed one and a tabulated
/// laser spectrum too (whose fit to the table is reported and close).
#[test]
fn outputs_are_finite_for_entangled_designs_and_tables() {
    use clockwright_core::design::Entanglement;
    use clockwright_core::noise::{SpectrumTable, SpectrumUnit};
    let base = demo_design("Fernhollow ion, string of four");
    let mut ghz = base.clone();
    ghz.atoms.entanglement = Entanglement::Ghz;
    let mut sq = base.clone();
    sq.atoms.entanglement = Entanglement::Squeezed { gain_db: 6.0 };
    let mut table = base.clone();
    table.laser.noise.clear();
    table.laser.table = Some(SpectrumTable { unit: SpectrumUnit::SY, points: vec![[0.01, 1e-29], [1.0, 1e-31], [100.0, 1e-32]] });
    for d in [ghz, sq, table] {
        let r = simulate(&d, &SimOptions { cycles: 2000, ..Default::default() }).unwrap();
        let v = serde_json::to_value(&r).unwrap().to_string();
        assert!(!v.contains("null") || r.noise.table_fit_error.is_none() || r.fringe.first_off_fringe_cycle.is_none());
        for p in r.locked.points.iter().chain(&r.free_laser.points) {
            assert!(p.deviation.is_finite() && p.ci_low.is_finite() && p.ci_high.is_finite());
        }
        if let Some(e) = r.noise.table_fit_error {
            assert!(e < 0.05, "table misfit {e}");
        }
    }
}

/// The ziggurat normal deviates against the normal distribution: Pearson's chi-square over
/// 200 bins of width 0.05 on [-5, 5] plus both tails, with probabilities from erfc (libm),
/// 2e6 draws, critical value at 0.999; and the tail beyond 3.4426 (the ziggurat's base
/// strip) holds its share within 5 standard errors. Common practice for testing a sampler.
#[test]
fn ziggurat_normal_deviates_follow_the_normal_distribution() {
    let z = Ziggurat::new();
    let mut rng = Rng::new(99);
    let n = 2_000_000usize;
    let bins = 200usize;
    let cdf = |x: f64| 0.5 * libm::erfc(-x / std::f64::consts::SQRT_2);
    let mut counts = vec![0.0; bins + 2];
    let mut tail = 0.0;
    for _ in 0..n {
        let x = z.normal(&mut rng);
        assert!(x.is_finite());
        if x.abs() > 3.442619855899 {
            tail += 1.0;
        }
        let k = if x < -5.0 { 0 } else if x >= 5.0 { bins + 1 } else { 1 + ((x + 5.0) / 0.05) as usize };
        counts[k.min(bins + 1)] += 1.0;
    }
    let mut chi2 = 0.0;
    let mut used = 0;
    let (mut e_acc, mut o_acc) = (0.0, 0.0);
    for k in 0..bins + 2 {
        let (a, b) = match k {
            0 => (f64::NEG_INFINITY, -5.0),
            k if k == bins + 1 => (5.0, f64::INFINITY),
            k => (-5.0 + (k - 1) as f64 * 0.05, -5.0 + k as f64 * 0.05),
        };
        let p = (if b.is_infinite() { 1.0 } else { cdf(b) }) - (if a.is_infinite() { 0.0 } else { cdf(a) });
        e_acc += p * n as f64;
        o_acc += counts[k];
        if e_acc >= 5.0 || k == bins + 1 {
            chi2 += (o_acc - e_acc) * (o_acc - e_acc) / e_acc;
            used += 1;
            e_acc = 0.0;
            o_acc = 0.0;
        }
    }
    let crit = chi2_quantile(0.999, (used - 1) as f64).unwrap();
    assert!(chi2 < crit, "chi-square {chi2} over {used} bins exceeds {crit}");
    let p_tail = libm::erfc(3.442619855899 / std::f64::consts::SQRT_2);
    let se = (p_tail * (1.0 - p_tail) * n as f64).sqrt();
    assert!((tail - p_tail * n as f64).abs() < 5.0 * se, "tail {tail} vs {}", p_tail * n as f64);
}
