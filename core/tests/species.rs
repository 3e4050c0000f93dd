//! The species catalog and the design's species and K_alpha fields.

mod common;

use clockwright_core::species::{catalog, find, Carrier};
use clockwright_core::{demo, Design};

/// Every entry the catalog must carry (the clock transitions of the trade).
const REQUIRED: [&str; 11] = ["al27_ion", "in115_ion", "hg199_ion", "yb171_ion_e2", "yb171_ion_e3", "ca40_ion", "sr88_ion", "sr87_lattice", "yb171_lattice", "th229_nuclear", "ar40_13plus"];

#[test]
fn catalog_holds_every_required_transition_with_sources() {
    for id in REQUIRED {
        let s = find(id).unwrap_or_else(|| panic!("{id} missing"));
        for (what, src) in [("nu0", s.nu0_hz.source), ("lifetime", s.lifetime_s.source), ("K", s.k_alpha.source), ("count", s.typical_count.source)] {
            assert!(src.len() > 10, "{id}: the {what} value needs a source");
        }
        assert!(s.nu0_hz.value > 1e14 && s.nu0_hz.value < 1e16, "{id}");
        assert!(s.lifetime_s.value > 0.0 && s.lifetime_s.low <= s.lifetime_s.value && s.lifetime_s.value <= s.lifetime_s.high, "{id}");
        assert!(s.k_alpha.low <= s.k_alpha.value && s.k_alpha.value <= s.k_alpha.high, "{id}");
        assert!(s.typical_count.value >= 1.0, "{id}");
    }
    let ids: Vec<_> = catalog().iter().map(|s| s.id).collect();
    let mut sorted = ids.clone();
    sorted.sort();
    sorted.dedup();
    assert_eq!(sorted.len(), ids.len(), "identifiers must be unique");
    // The nuclear transition's K is uncertain and carries its range.
    let th = find("th229_nuclear").unwrap();
    assert!(th.k_alpha.high / th.k_alpha.low >= 5.0);
    assert_eq!(th.carrier, Carrier::Nucleus);
    assert_eq!(find("sr87_lattice").unwrap().carrier, Carrier::Neutral);
}

#[test]
fn catalog_values_match_the_cited_tables() {
    // (id, nu0 in Hz, K_alpha): frequencies from the CIPM 2021 list of recommended values of
    // standard frequencies, K from Phys. Rev. A 70, 014102 (2004) (Al+, In+, Sr, Yb) and
    // Rev. Mod. Phys. 90, 025008 (2018) (Hg+, Yb+, Ca+, Sr+); all recalled from memory.
    let table: [(&str, f64, f64); 9] = [
        ("al27_ion", 1_121_015_393_207_857.4, 0.008),
        ("in115_ion", 1_267_402_452_901_041.3, 0.18),
        ("hg199_ion", 1_064_721_609_899_146.96, -2.94),
        ("yb171_ion_e2", 688_358_979_309_308.24, 1.00),
        ("yb171_ion_e3", 642_121_496_772_645.1, -5.95),
        ("ca40_ion", 411_042_129_776_400.4, 0.15),
        ("sr88_ion", 444_779_044_095_486.5, 0.43),
        ("sr87_lattice", 429_228_004_229_873.0, 0.06),
        ("yb171_lattice", 518_295_836_590_863.6, 0.31),
    ];
    for (id, nu, k) in table {
        let s = find(id).unwrap();
        assert!((s.nu0_hz.value - nu).abs() <= 1e-15 * nu, "{id}: {} vs {nu}", s.nu0_hz.value);
        assert_eq!(s.k_alpha.value, k, "{id}");
    }
    // Vacuum wavelengths of the clock lasers, nm (handbook values, from memory): an
    // independent check that no frequency is off by a digit.
    let wavelengths: [(&str, f64); 11] = [
        ("al27_ion", 267.43),
        ("in115_ion", 236.54),
        ("hg199_ion", 281.57),
        ("yb171_ion_e2", 435.52),
        ("yb171_ion_e3", 466.88),
        ("ca40_ion", 729.35),
        ("sr88_ion", 674.03),
        ("sr87_lattice", 698.45),
        ("yb171_lattice", 578.42),
        ("th229_nuclear", 148.38),
        ("ar40_13plus", 441.4),
    ];
    for (id, nm) in wavelengths {
        let lambda = 299_792_458.0 / find(id).unwrap().nu0_hz.value * 1e9;
        assert!((lambda - nm).abs() < 0.05, "{id}: {lambda} nm vs {nm} nm");
    }
}

#[test]
fn mercury_ion_is_about_ten_times_more_sensitive_to_alpha_than_the_ytterbium_lattice() {
    // Common practice (a fact of the trade, no source).
    let r = find("hg199_ion").unwrap().k_alpha.value.abs() / find("yb171_lattice").unwrap().k_alpha.value.abs();
    assert!((7.0..14.0).contains(&r), "{r}");
}

#[test]
fn design_species_and_k_override_resolve_and_round_trip() {
    let mut d = demo::designs()[0].clone();
    d.transition.species = None;
    assert_eq!(d.k_alpha(), None);
    assert!(!d.to_json().contains("species"), "absent optional fields are not written");
    d.transition.species = Some("al27_ion".into());
    assert_eq!(d.k_alpha(), Some(0.008));
    assert!(d.k_alpha_source().unwrap().contains("al27_ion"));
    d.transition.k_alpha = Some(0.0081);
    assert_eq!(d.k_alpha(), Some(0.0081));
    assert!(d.validate().is_ok());
    let back = Design::from_json(&d.to_json()).unwrap();
    assert_eq!(back, d);
    // Older documents without the fields keep parsing to the same design.
    let mut v: serde_json::Value = serde_json::from_str(demo::FILES[0].1).unwrap();
    v["transition"].as_object_mut().unwrap().remove("species");
    let old = Design::from_value(v).unwrap();
    assert_eq!(old.transition.species, None);
    assert_eq!(old.transition.k_alpha, None);
    let mut with = old.clone();
    with.transition.species = Some("al27_ion".into());
    assert_eq!(Design::from_json(demo::FILES[0].1).unwrap(), with, "the demo file differs only by its species");
}

#[test]
fn unknown_species_and_bad_k_are_named_with_their_paths() {
    let mut d = demo::designs()[0].clone();
    d.transition.species = Some("unobtainium".into());
    d.transition.k_alpha = Some(f64::NAN);
    let e = d.validate().unwrap_err();
    let p = |path: &str| e.problems.iter().find(|p| p.path == path).unwrap_or_else(|| panic!("{path} missing in {e}"));
    assert!(p("transition.species").allowed.contains("al27_ion"));
    assert_eq!(p("transition.k_alpha").value, "NaN");
    d.transition.species = None;
    d.transition.k_alpha = Some(2e6);
    assert!(d.validate().is_err());
    assert_eq!(d.k_alpha(), Some(2e6), "resolution does not validate; evaluate does");
}
