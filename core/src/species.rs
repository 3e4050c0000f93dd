//! The catalog of clock transitions: frequency, excited-state lifetime, sensitivity to the
//! fine-structure constant and typical atom or ion numbers, each value with its source.
//!
//! K_alpha is defined by delta nu / nu = K_alpha delta alpha / alpha (the convention of the
//! tables cited below). Frequencies are the CIPM recommended values where one exists; the
//! values here were written down from memory of the cited lists and tables (each `source`
//! says so), to the digits the model needs (a design's frequency only sets the fractional
//! scale, so 1e-12 relative is far more than enough). A design may override any value: the
//! transition block carries its own `frequency_hz` and `lifetime_s`, and `transition.k_alpha`
//! overrides the catalog's K_alpha.

use serde::Serialize;

/// A number with where it comes from.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Sourced {
    /// The value, in the unit the field name states.
    pub value: f64,
    /// Where the value comes from: a list or table by journal reference, "common practice"
    /// or "from memory".
    pub source: &'static str,
}

/// An uncertain value: central value, lowest and highest plausible value, and the source.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct SourcedRange {
    pub value: f64,
    /// Lower end of the range the literature spans (equal to `value` when well known).
    pub low: f64,
    /// Upper end of the range.
    pub high: f64,
    pub source: &'static str,
}

/// What carries the transition.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Carrier {
    /// A trapped ion (single or a few, often with a logic ion).
    Ion,
    /// Neutral atoms in an optical lattice.
    Neutral,
    /// A nuclear transition (here in a trapped ion).
    Nucleus,
}

/// One clock transition.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Species {
    /// Stable identifier used in designs (`transition.species`).
    pub id: &'static str,
    /// Name as the trade writes it ("27Al+ 1S0-3P0").
    pub name: &'static str,
    pub carrier: Carrier,
    /// Transition frequency nu0, Hz.
    pub nu0_hz: Sourced,
    /// Excited-state lifetime, s.
    pub lifetime_s: SourcedRange,
    /// Sensitivity coefficient K_alpha = (delta nu/nu)/(delta alpha/alpha), dimensionless.
    pub k_alpha: SourcedRange,
    /// Typical number of atoms or spectroscopy ions probed per cycle.
    pub typical_count: Sourced,
}

/// Source strings, written once.
const CIPM: &str = "CIPM 2021 list of recommended values of standard frequencies (value recalled from memory)";
/// K_alpha of two-valence-electron systems (Al+, In+, Sr, Yb): Phys. Rev. A 70, 014102 (2004),
/// "Relativistic effects in two valence-electron atoms and ions and the search for variation
/// of the fine-structure constant".
const K_TWO_VALENCE: &str = "Phys. Rev. A 70, 014102 (2004), table of K values (recalled from memory)";
/// K_alpha of the singly charged alkali-like ions and of the compilation in
/// Rev. Mod. Phys. 90, 025008 (2018), "Search for new physics with atoms and molecules".
const K_REVIEW: &str = "Rev. Mod. Phys. 90, 025008 (2018), table of enhancement factors K (recalled from memory)";
const K_TH: &str = "from memory: estimates of the 229Th isomer's K_alpha spread over about 1e3 to 1e4 (nuclear-structure dependent); central value one recent estimate";
const K_HCI: &str = "leading order: a fine-structure splitting scales as alpha^2 Z^4, so K = 2 (relativistic corrections of a few percent; common practice)";
const TAU_MEM: &str = "from memory of published lifetime measurements or calculations";
const COUNT_ION: &str = "common practice: one spectroscopy ion with a logic ion";
const COUNT_LATTICE: &str = "common practice: thousands of atoms in a one-dimensional lattice";

const fn s(value: f64, source: &'static str) -> Sourced {
    Sourced { value, source }
}

const fn r(value: f64, low: f64, high: f64, source: &'static str) -> SourcedRange {
    SourcedRange { value, low, high, source }
}

/// The catalog, in a fixed order.
pub static CATALOG: [Species; 11] = [
    Species {
        id: "al27_ion",
        name: "27Al+ 1S0-3P0",
        carrier: Carrier::Ion,
        nu0_hz: s(1_121_015_393_207_857.4, CIPM),
        lifetime_s: r(20.6, 19.2, 22.0, TAU_MEM),
        k_alpha: r(0.008, 0.008, 0.008, K_TWO_VALENCE),
        typical_count: s(1.0, COUNT_ION),
    },
    Species {
        id: "in115_ion",
        name: "115In+ 1S0-3P0",
        carrier: Carrier::Ion,
        nu0_hz: s(1_267_402_452_901_041.3, CIPM),
        lifetime_s: r(0.195, 0.19, 0.2, TAU_MEM),
        k_alpha: r(0.18, 0.18, 0.18, K_TWO_VALENCE),
        typical_count: s(1.0, COUNT_ION),
    },
    Species {
        id: "hg199_ion",
        name: "199Hg+ 2S1/2-2D5/2",
        carrier: Carrier::Ion,
        nu0_hz: s(1_064_721_609_899_146.96, CIPM),
        lifetime_s: r(0.086, 0.08, 0.095, TAU_MEM),
        k_alpha: r(-2.94, -2.94, -2.94, K_REVIEW),
        typical_count: s(1.0, "common practice: one ion"),
    },
    Species {
        id: "yb171_ion_e2",
        name: "171Yb+ 2S1/2-2D3/2 (quadrupole)",
        carrier: Carrier::Ion,
        nu0_hz: s(688_358_979_309_308.24, CIPM),
        lifetime_s: r(0.0527, 0.051, 0.054, TAU_MEM),
        k_alpha: r(1.00, 1.00, 1.00, K_REVIEW),
        typical_count: s(1.0, "common practice: one ion"),
    },
    Species {
        id: "yb171_ion_e3",
        name: "171Yb+ 2S1/2-2F7/2 (octupole)",
        carrier: Carrier::Ion,
        nu0_hz: s(642_121_496_772_645.1, CIPM),
        lifetime_s: r(5.0e7, 3.0e7, 7.0e7, "from memory: about 1.6 years (several years in some calculations)"),
        k_alpha: r(-5.95, -5.95, -5.95, K_REVIEW),
        typical_count: s(1.0, "common practice: one ion"),
    },
    Species {
        id: "ca40_ion",
        name: "40Ca+ 2S1/2-2D5/2",
        carrier: Carrier::Ion,
        nu0_hz: s(411_042_129_776_400.4, CIPM),
        lifetime_s: r(1.168, 1.15, 1.18, TAU_MEM),
        k_alpha: r(0.15, 0.15, 0.15, K_REVIEW),
        typical_count: s(1.0, "common practice: one ion"),
    },
    Species {
        id: "sr88_ion",
        name: "88Sr+ 2S1/2-2D5/2",
        carrier: Carrier::Ion,
        nu0_hz: s(444_779_044_095_486.5, CIPM),
        lifetime_s: r(0.39, 0.37, 0.41, TAU_MEM),
        k_alpha: r(0.43, 0.43, 0.43, K_REVIEW),
        typical_count: s(1.0, "common practice: one ion"),
    },
    Species {
        id: "sr87_lattice",
        name: "87Sr 1S0-3P0 (lattice)",
        carrier: Carrier::Neutral,
        nu0_hz: s(429_228_004_229_873.0, CIPM),
        lifetime_s: r(150.0, 110.0, 190.0, "from memory: calculations and measurements of the 3P0 lifetime span about 110 to 190 s"),
        k_alpha: r(0.06, 0.06, 0.06, K_TWO_VALENCE),
        typical_count: s(3000.0, COUNT_LATTICE),
    },
    Species {
        id: "yb171_lattice",
        name: "171Yb 1S0-3P0 (lattice)",
        carrier: Carrier::Neutral,
        nu0_hz: s(518_295_836_590_863.6, CIPM),
        lifetime_s: r(20.0, 15.0, 26.0, "from memory: calculated 3P0 lifetime of about 20 s"),
        k_alpha: r(0.31, 0.31, 0.31, K_TWO_VALENCE),
        typical_count: s(3000.0, COUNT_LATTICE),
    },
    Species {
        id: "th229_nuclear",
        name: "229mTh nuclear isomer (229Th3+)",
        carrier: Carrier::Nucleus,
        nu0_hz: s(2.020_407_384_335e15, "from memory of the 2024 frequency-ratio measurement in a solid-state host, Nature 633, 63 (2024)"),
        lifetime_s: r(1.4e3, 6.0e2, 2.5e3, "from memory: radiative lifetime of the isomer in the ion of order 1e3 s"),
        k_alpha: r(5.9e3, 1.0e3, 1.0e4, K_TH),
        typical_count: s(1.0, "common practice: one trapped ion"),
    },
    Species {
        id: "ar40_13plus",
        name: "40Ar13+ 2P1/2-2P3/2 (highly charged ion)",
        carrier: Carrier::Ion,
        nu0_hz: s(6.7922e14, "from memory of Nature 611, 43 (2022), \"An optical atomic clock based on a highly charged ion\" (leading five digits only)"),
        lifetime_s: r(9.57e-3, 9.5e-3, 9.65e-3, TAU_MEM),
        k_alpha: r(2.0, 1.9, 2.1, K_HCI),
        typical_count: s(1.0, "common practice: one highly charged ion with a logic ion"),
    },
];

/// The whole catalog.
pub fn catalog() -> &'static [Species] {
    &CATALOG
}

/// The catalog entry with identifier `id`.
pub fn find(id: &str) -> Option<&'static Species> {
    CATALOG.iter().find(|s| s.id == id)
}

/// The identifiers, comma separated, for error messages.
pub fn ids() -> String {
    CATALOG.iter().map(|s| s.id).collect::<Vec<_>>().join(", ")
}
