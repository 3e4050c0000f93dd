//! The design document: validation with field paths, exact JSON round trip, noise-unit
//! conversions, spectrum CSV parsing, and hostile or extreme input.

mod common;
use clockwright_core::demo;
use clockwright_core::design::*;
use clockwright_core::noise::*;
use clockwright_core::{evaluate, EvalOptions};
use common::*;
use proptest::prelude::*;

#[test]
fn demo_designs_are_valid_and_round_trip_exactly() {
    assert_eq!(demo::designs().len(), 4);
    for (name, text) in demo::FILES {
        let d = Design::from_json(text).unwrap_or_else(|e| panic!("{name}: {e}"));
        d.validate().unwrap();
        let again = Design::from_json(&d.to_json()).unwrap();
        assert_eq!(d, again, "{name}");
        // Bit-exact numbers.
        assert_eq!(d.transition.frequency_hz.to_bits(), again.transition.frequency_hz.to_bits());
    }
}

#[test]
fn every_problem_is_reported_with_its_path() {
    let mut d = demo::designs()[1].clone();
    d.atoms.count = 0;
    d.transition.frequency_hz = f64::NAN;
    if let Segment::Pulse { duration_s, .. } = &mut d.sequence.segments[2] {
        *duration_s = -0.2;
    }
    d.detection.misread_ground = 0.7;
    let e = d.validate().unwrap_err();
    let paths: Vec<&str> = e.problems.iter().map(|p| p.path.as_str()).collect();
    for want in ["atoms.count", "transition.frequency_hz", "sequence.segments[2].duration_s", "detection.misread_ground"] {
        assert!(paths.contains(&want), "missing {want} in {paths:?}");
    }
    let text = e.to_string();
    assert!(text.contains("sequence.segments[2].duration_s: -0.2 s; must be a finite number from"), "{text}");
    assert!(text.contains("NaN"), "{text}");
}

#[test]
fn nonsense_sequences_are_refused() {
    let base = demo::designs()[0].clone();
    let cases: Vec<(Vec<Segment>, &str)> = vec![
        (vec![], "sequence.segments"),
        (vec![dead(0.1)], "sequence.segments"),
        (vec![pulse(0.1, 0.0)], "sequence.segments[0].area_pi"),
        (vec![pulse(0.1, 1e6)], "sequence.segments[0].area_pi"),
        (vec![pulse(0.01, 0.5), dead(0.1), pulse(0.01, 0.5)], "sequence.segments[1].kind"),
        (vec![Segment::Free { duration_s: 0.1 }, pulse(0.1, 1.0)], "sequence.segments[0].kind"),
        (vec![pulse(1e-9, 1.0)], "sequence.segments"), // a cycle of 1 ns
    ];
    for (segs, path) in cases {
        let mut d = base.clone();
        d.sequence.segments = segs;
        d.lock.attack_time_s = 1.0;
        let e = d.validate().unwrap_err();
        assert!(e.problems.iter().any(|p| p.path == path), "{path}: {e}");
    }
}

#[test]
fn unknown_fields_and_versions_are_refused() {
    let text = demo::FILES[0].1;
    let mut v: serde_json::Value = serde_json::from_str(text).unwrap();
    v["schema_version"] = serde_json::json!(99);
    assert!(Design::from_value(v.clone()).unwrap_err().problems[0].path == "schema_version");
    v["schema_version"] = serde_json::json!(1);
    v["atoms"]["colour"] = serde_json::json!("red");
    let e = Design::from_value(v).unwrap_err();
    assert!(e.to_string().contains("colour"), "{e}");
    assert!(Design::from_json("{\"schema_version\": 1, \"name\": ").is_err());
    assert!(Design::from_json("[]").is_err());
}

/// Unit conversions (IEEE Std 1139-2008): S_y = S_nu/nu0^2; S_y = (f/nu0)^2 S_phi with
/// L(f) = S_phi/2; white FM sigma_y(1 s) = sqrt(h0/2); flicker floor sqrt(2 ln2 h_-1);
/// random walk sqrt(2 pi^2 h_-2/3) at 1 s.
#[test]
fn noise_units_convert_through_nu0() {
    let nu0 = 4.0e14;
    let (a, h) = NoiseTerm::PowerLaw { alpha: 0, coefficient: 3.2, unit: SpectrumUnit::SNu }.h(nu0);
    assert_eq!(a, 0);
    assert!(rel(h, 3.2 / (nu0 * nu0)) < 1e-15);
    // L(f) = -80 dBc/Hz at 1 kHz as white phase noise: S_phi = 2e-8 rad^2/Hz,
    // S_y(1 kHz) = (1e3/nu0)^2 * 2e-8 = 1.25e-31 /Hz, so h2 = 1.25e-37 Hz^-3.
    let (a, h) = NoiseTerm::PowerLawAt { alpha: 2, at_hz: 1e3, value: -80.0, unit: SpectrumUnit::LDbc }.h(nu0);
    assert_eq!(a, 2);
    assert!(rel(h, 1.25e-37) < 1e-12, "{h}");
    for t in [NoiseTerm::WhiteFrequency { sigma_y_1s: 3e-16 }, NoiseTerm::FlickerFloor { sigma_y: 3e-16 }, NoiseTerm::RandomWalk { sigma_y_1s: 3e-16 }] {
        let (a, h) = t.h(nu0);
        let s = clockwright_core::allan::allan_variance_power_law(a, h, 1.0, 1e3).sqrt();
        assert!(rel(s, 3e-16) < 1e-12, "{t:?}");
    }
}

#[test]
fn spectrum_csv_parses_and_names_bad_lines() {
    let t = SpectrumTable::from_csv("# measured\nf_hz,s_nu\n0.1, 4\n1,1\n\n10,0.3\n").unwrap();
    assert_eq!(t.unit, SpectrumUnit::SNu);
    assert_eq!(t.points, vec![[0.1, 4.0], [1.0, 1.0], [10.0, 0.3]]);
    let e = SpectrumTable::from_csv("f_hz,s_y\n1,1e-30\n2,abc\n3,1e-31\n").unwrap_err();
    assert_eq!(e.problems[0].path, "line 3");
    let e = SpectrumTable::from_csv("f_hz,s_y\n1,1e-30\n0.5,1e-30\n").unwrap_err();
    assert_eq!(e.problems[0].path, "line 3", "{e}");
    let e = SpectrumTable::from_csv("f_hz,s_y\n1,-1e-30\n2,1e-30\n").unwrap_err();
    assert_eq!(e.problems[0].path, "line 2");
    assert!(SpectrumTable::from_csv("freq,watts\n1,2\n").is_err());
    assert!(SpectrumTable::from_csv("").is_err());
}

/// A tabulated spectrum that is exactly a power law gives the power law's numbers.
#[test]
fn table_equals_power_law_it_samples() {
    let mut a = demo::designs()[2].clone();
    a.laser.noise = vec![NoiseTerm::FlickerFloor { sigma_y: 2e-16 }];
    let (_, h) = a.laser.noise[0].h(a.transition.frequency_hz);
    let mut b = a.clone();
    b.laser.noise.clear();
    b.laser.table = Some(SpectrumTable { unit: SpectrumUnit::SY, points: (0..40).map(|k| { let f = 10f64.powf(-4.0 + 0.25 * k as f64); [f, h / f] }).collect() });
    b.laser.high_cutoff_hz = 1e8;
    let ea = evaluate(&a, &EvalOptions::default()).unwrap();
    let eb = evaluate(&b, &EvalOptions::default()).unwrap();
    assert!(rel(eb.dick.sigma_1s, ea.dick.sigma_1s) < 1e-6, "{} vs {}", eb.dick.sigma_1s, ea.dick.sigma_1s);
    for i in [0, 20, 40, 60] {
        assert!(rel(eb.curve.total[i], ea.curve.total[i]) < 1e-4, "tau {}: {} vs {}", ea.curve.tau_s[i], eb.curve.total[i], ea.curve.total[i]);
        assert!(rel(eb.curve.free_laser[i], ea.curve.free_laser[i]) < 1e-3);
    }
}

fn all_finite(e: &clockwright_core::Evaluation) -> bool {
    // serde_json writes a non-finite float as null; the only fields that may be null are
    // the documented optional ones (the time to the target and the limit there go together).
    let mut v = serde_json::to_value(e).unwrap();
    v["limits"]["coherence_probe_limit_s"] = serde_json::json!(0.0);
    v["target"]["time_s"] = serde_json::json!(0.0);
    v["target"]["dominant"] = serde_json::json!("laser");
    fn walk(v: &serde_json::Value) -> bool {
        match v {
            serde_json::Value::Number(n) => n.as_f64().map(|x| x.is_finite()).unwrap_or(true),
            serde_json::Value::Array(a) => a.iter().all(walk),
            serde_json::Value::Object(o) => o.values().all(walk),
            serde_json::Value::Null => false,
            _ => true,
        }
    }
    walk(&v) && e.curve.total.iter().all(|x| x.is_finite() && *x > 0.0)
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 64, .. ProptestConfig::default() })]

    /// Structurally valid but extreme designs: evaluation either succeeds with finite
    /// numbers everywhere or returns an error with a path; it never panics.
    #[test]
    fn extreme_designs_never_panic_or_give_nan(
        nu0 in prop::sample::select(vec![1.0, 1e9, 4e14, 2e15, 1e17]),
        n in prop::sample::select(vec![1u64, 3, 1000, 100_000_000]),
        probe in prop::sample::select(vec![1e-9, 1e-6, 1e-3, 0.5, 30.0, 1e5]),
        area in prop::sample::select(vec![0.01, 0.5, 1.0, 3.0, 50.0]),
        dead_s in prop::sample::select(vec![0.0, 1e-9, 0.1, 1e4]),
        lifetime in prop::sample::select(vec![None, Some(1e-9), Some(0.01), Some(20.0)]),
        sigma in prop::sample::select(vec![1e-30, 1e-17, 1e-13, 1e-3]),
        ramsey in any::<bool>(),
    ) {
        let segs = if ramsey {
            vec![pulse(probe / 10.0 + 1e-9, area / 2.0), Segment::Free { duration_s: probe }, pulse(probe / 10.0 + 1e-9, area / 2.0)]
        } else {
            vec![pulse(probe, area)]
        };
        let mut d = design(nu0, n, segs, dead_s, laser(vec![NoiseTerm::WhiteFrequency { sigma_y_1s: sigma }, NoiseTerm::FlickerFloor { sigma_y: sigma }]));
        d.transition.lifetime_s = lifetime;
        match evaluate(&d, &EvalOptions::default()) {
            Ok(e) => prop_assert!(all_finite(&e), "non-finite output"),
            Err(e) => prop_assert!(!e.problems.is_empty() && !e.problems[0].path.is_empty()),
        }
    }

    /// Any design assembled from valid fields round-trips through JSON exactly.
    #[test]
    fn json_round_trip_is_exact(nu0 in 1.0f64..1e17, n in 1u64..1000, t in 1e-6f64..10.0, s in 1e-20f64..1e-10, ph in -3600.0f64..3600.0) {
        let mut d = design(nu0, n, vec![Segment::Pulse { duration_s: t, area_pi: 0.7, phase_deg: ph, detuning_offset_hz: -t }], t, white_laser(s));
        d.name = "name with <b>markup</b> & \"quotes\" ∆ν".into();
        let back = Design::from_json(&d.to_json()).unwrap();
        prop_assert_eq!(back, d);
    }
}

#[test]
fn structural_errors_name_their_path() {
    let mut v: serde_json::Value = serde_json::from_str(demo::FILES[0].1).unwrap();
    v["atoms"]["count"] = serde_json::json!(2.5);
    let e = Design::from_value(v.clone()).unwrap_err();
    assert_eq!(e.problems[0].path, "atoms.count", "{e}");
    v["atoms"]["count"] = serde_json::json!(1);
    v["sequence"]["segments"][2]["duration_s"] = serde_json::json!("long");
    // Inside a tagged segment the path stops at the segment (serde buffers tagged content).
    let e = Design::from_value(v).unwrap_err();
    assert!(e.problems[0].path.starts_with("sequence.segments[2]"), "{e}");
}

#[test]
fn presets_are_checked() {
    use clockwright_core::sequence::Preset;
    let e = Preset::Ramsey { pulse_s: -1.0, free_s: 0.0 }.validate().unwrap_err();
    let paths: Vec<_> = e.problems.iter().map(|p| p.path.as_str()).collect();
    assert_eq!(paths, ["preset.pulse_s", "preset.free_s"]);
    assert!(Preset::Rabi { probe_time_s: 0.1 }.validate().is_ok());
}

/// Below its first row a table extrapolates its end power law, but never steeper than
/// f^-2 (random walk), so the Allan integral stays finite.
#[test]
fn table_extrapolation_is_bounded() {
    let l = Laser { label: String::new(), noise: vec![], table: Some(SpectrumTable { unit: SpectrumUnit::SY, points: vec![[1.0, 1e-30], [2.0, 1e-30 / 16.0], [4.0, 1e-31]] }), high_cutoff_hz: 1e3, drift_per_s: 0.0 };
    let s = Spectrum::from_laser(&l, 5e14);
    assert!(rel(s.s_y(0.5), 1e-30 * 4.0) < 1e-12, "{}", s.s_y(0.5));
    assert!(rel(s.s_y(1.5), 1e-30 * 1.5f64.powf(-4.0)) < 1e-12);
}
