//! Facts of the trade, as sanity checks of whole budgets (common practice, no single source).

mod common;
use clockwright_core::noise::NoiseTerm;
use clockwright_core::{demo, evaluate, EvalOptions};
use common::*;

/// Common practice: a single-ion optical clock reaches about 1e-15 at 1 s and averages
/// as tau^-1/2.
#[test]
fn single_ion_near_1e15_at_one_second() {
    let d = &demo::designs()[0];
    let e = evaluate(d, &EvalOptions::default()).unwrap();
    assert!(e.sigma_1s_equivalent > 2e-16 && e.sigma_1s_equivalent < 5e-15, "{}", e.sigma_1s_equivalent);
    // Slope of the long-tau curve in log-log: -1/2 within 1%.
    let n = e.curve.tau_s.len();
    let (t1, t2) = (e.curve.tau_s[n - 11], e.curve.tau_s[n - 1]);
    let (s1, s2) = (e.curve.total[n - 11], e.curve.total[n - 1]);
    let slope = (s2 / s1).ln() / (t2 / t1).ln();
    assert!((slope + 0.5).abs() < 0.01, "slope {slope}");
}

/// Common practice: optical lattice clocks average into the 1e-18 range in less than a day.
#[test]
fn lattice_reaches_1e18_range_within_a_day() {
    let mut d = demo::designs()[2].clone();
    // A state-of-the-art laser (cryogenic-cavity figures of the demo).
    d.laser = demo::lasers()[1].clone();
    let e = evaluate(&d, &EvalOptions { target_instability: 1e-17, ..Default::default() }).unwrap();
    let day = e.checkpoints.iter().find(|c| c.tau_s == 86_400.0).unwrap();
    assert!(day.total < 1e-17, "one day: {}", day.total);
    assert!(e.target.time_s.unwrap() < 86_400.0);
}

/// Common practice: excited-state lifetimes of about 20 s (aluminium ion, ytterbium
/// lattice) and over 100 s (strontium lattice) cap the useful probe time: with a perfect
/// laser, probes beyond the lifetime gain nothing in projection noise.
#[test]
fn probes_beyond_the_lifetime_gain_nothing() {
    for &lifetime in &[20.6, 150.0] {
        let sigma = |t: f64| {
            let mut d = design(1.1e15, 1, vec![pulse(t, 1.0)], 0.05, laser(vec![NoiseTerm::WhiteFrequency { sigma_y_1s: 1e-22 }]));
            d.transition.lifetime_s = Some(lifetime);
            d.lock.attack_time_s = 20.0 * (t + 0.05);
            evaluate(&d, &EvalOptions::default()).unwrap().projection.sigma_1s
        };
        let best = [0.1, 0.3, 1.0].iter().map(|&f| sigma(f * lifetime)).fold(f64::INFINITY, f64::min);
        let long = sigma(3.0 * lifetime);
        assert!(long > best, "lifetime {lifetime}: 3 lifetimes {long} vs best {best}");
        // Short probes still follow 1/T: ten times shorter is several times worse.
        assert!(sigma(0.01 * lifetime) > 3.0 * best);
    }
}

/// The mechanism named as the limit at the time to the target is the largest of the three
/// parts the locked-laser model gives at that very time (`locked_variances`, its slow twin:
/// the parts computed again at that one tau), for every demo design and several targets.
#[test]
fn limit_at_the_target_time_is_the_largest_part_there() {
    use clockwright_core::budget::locked_variances;
    use clockwright_core::result::Mechanism;
    for d in demo::designs() {
        for target in [1e-16, 1e-17, 1e-18, 3e-19] {
            let e = evaluate(&d, &EvalOptions { target_instability: target, ..EvalOptions::default() }).unwrap();
            match e.target.time_s {
                None => assert_eq!(e.target.dominant, None),
                Some(t) => {
                    let (p, _) = locked_variances(&d, &[t]).unwrap()[0];
                    let k = (0..3).fold(0, |k, i| if p[i] > p[k] { i } else { k });
                    let want = [Mechanism::Laser, Mechanism::Projection, Mechanism::Dick][k];
                    assert_eq!(e.target.dominant, Some(want), "{} at {t} s: parts {p:?}", d.name);
                }
            }
        }
    }
}
