//! The design document: one clock design as a user writes it, its schema and its checks.
//!
//! A document is plain JSON (see `docs/design-schema.md`). Parsing never panics; every
//! field is checked by [`Design::validate`], which reports all problems at once with the
//! field path, the value and what is allowed.

use crate::error::{show, Checker, InputError};
use crate::noise::NoiseTerm;
use crate::noise::SpectrumTable;
use serde::{Deserialize, Serialize};

/// Schema version written by this build. Older versions are migrated on load.
pub const SCHEMA_VERSION: u32 = 1;

/// Caps on everything input controls, so no document can make the engine run unbounded.
pub mod caps {
    /// Segments in one interrogation sequence.
    pub const MAX_SEGMENTS: usize = 64;
    /// Shortest segment, s.
    pub const MIN_DURATION_S: f64 = 1e-9;
    /// Longest segment, s.
    pub const MAX_DURATION_S: f64 = 1e5;
    /// Largest pulse area, in units of pi.
    pub const MAX_AREA_PI: f64 = 50.0;
    /// Largest atom or ion count.
    pub const MAX_ATOMS: u64 = 100_000_000;
    /// Detection rounds.
    pub const MAX_ROUNDS: u32 = 99;
    /// Power-law terms in a laser model.
    pub const MAX_NOISE_TERMS: usize = 16;
    /// Transition frequency range, Hz (1 Hz to 1e17 Hz covers microwave to nuclear).
    pub const MIN_FREQUENCY_HZ: f64 = 1.0;
    pub const MAX_FREQUENCY_HZ: f64 = 1e17;
    /// Largest ratio of the highest Fourier frequency of the laser model to the cycle rate.
    pub const MAX_CUTOFF_TIMES_CYCLE: f64 = 1e9;
    /// Shortest cycle, s.
    pub const MIN_CYCLE_S: f64 = 1e-6;
    /// Shortest excited-state lifetime, s.
    pub const MIN_LIFETIME_S: f64 = 1e-6;
    /// Largest design name, characters (labels likewise).
    pub const MAX_NAME_CHARS: usize = 200;
    /// Most values in one design document (a full design with 64 segments, 16 noise terms
    /// and a 200-row table holds about 1 100).
    pub const MAX_DOCUMENT_VALUES: usize = 5_000;
    /// Most bytes of text (names, labels, keys) in one design document.
    pub const MAX_DOCUMENT_TEXT: usize = 20_000;
    /// Largest magnitude of a K_alpha override (the most sensitive proposed transitions
    /// reach about 1e4; 1e6 leaves room without admitting absurd values).
    pub const MAX_K_ALPHA: f64 = 1e6;
}

/// One clock design.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Design {
    /// Version of the schema this document follows ([`SCHEMA_VERSION`]).
    pub schema_version: u32,
    /// Free text shown in tables and legends.
    pub name: String,
    pub transition: Transition,
    pub atoms: Atoms,
    pub sequence: Sequence,
    pub detection: Detection,
    pub laser: Laser,
    pub lock: Lock,
}

/// The clock transition.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Transition {
    /// What the transition is, as free text ("27Al+ 1S0-3P0").
    #[serde(default)]
    pub label: String,
    /// Transition frequency nu0, Hz.
    pub frequency_hz: f64,
    /// Excited-state lifetime, s; `null` for a state that does not decay on the scale of the probe.
    #[serde(default)]
    pub lifetime_s: Option<f64>,
    /// Catalog identifier of the transition ([`crate::species::catalog`]), optional; it
    /// supplies K_alpha for comparisons of clocks unless `k_alpha` overrides it.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub species: Option<String>,
    /// Sensitivity to the fine-structure constant, K_alpha = (delta nu/nu)/(delta alpha/alpha),
    /// overriding the catalog's value; optional.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub k_alpha: Option<f64>,
}

/// The atoms or ions that are probed together.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Atoms {
    /// Number of atoms or spectroscopy ions probed in one cycle.
    pub count: u64,
    /// Optional entanglement of the ensemble.
    #[serde(default)]
    pub entanglement: Entanglement,
}

/// Entanglement of the probed ensemble.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize, Default)]
#[serde(tag = "kind", rename_all = "snake_case", deny_unknown_fields)]
pub enum Entanglement {
    /// Uncorrelated atoms: projection noise at the standard quantum limit.
    #[default]
    None,
    /// A spin-squeezed state; `gain_db` is the metrological gain 10 log10(1/xi^2)
    /// (Phys. Rev. A 50, 67 (1994)), which lowers the projection-noise variance by 1/xi^2.
    Squeezed { gain_db: f64 },
    /// A GHZ-type state of all `count` atoms: N-fold phase and N-fold laser-noise sensitivity,
    /// read out as one parity.
    Ghz,
}

/// The interrogation sequence: one cycle, as a list of segments in time order.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Sequence {
    pub segments: Vec<Segment>,
}

/// One piece of the cycle.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "snake_case", deny_unknown_fields)]
pub enum Segment {
    /// The probe light is on.
    Pulse {
        duration_s: f64,
        /// Pulse area Omega * duration, in units of pi (1 for a pi pulse, 0.5 for pi/2).
        area_pi: f64,
        /// Phase of the probe light, degrees.
        #[serde(default)]
        phase_deg: f64,
        /// Extra detuning during this pulse only (a frequency step, or an uncompensated
        /// probe light shift), Hz.
        #[serde(default)]
        detuning_offset_hz: f64,
    },
    /// Free evolution between pulses (the Ramsey dark time).
    Free { duration_s: f64 },
    /// Time in which the atoms are not probed: cooling, preparation, detection, other.
    /// Detection-labelled segments last one detection round each and repeat with
    /// `detection.rounds`.
    Dead { label: DeadLabel, duration_s: f64 },
}

/// What a dead-time segment is for.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum DeadLabel {
    Cooling,
    StatePreparation,
    Detection,
    Other,
}

impl DeadLabel {
    pub fn as_str(self) -> &'static str {
        match self {
            DeadLabel::Cooling => "cooling",
            DeadLabel::StatePreparation => "state_preparation",
            DeadLabel::Detection => "detection",
            DeadLabel::Other => "other",
        }
    }
}

impl Segment {
    pub fn duration_s(&self) -> f64 {
        match *self {
            Segment::Pulse { duration_s, .. } | Segment::Free { duration_s } | Segment::Dead { duration_s, .. } => duration_s,
        }
    }
}

/// State detection at the end of each cycle.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Detection {
    /// Rounds of detection per cycle, combined by majority vote. Each round repeats the
    /// detection-labelled dead time.
    #[serde(default = "one")]
    pub rounds: u32,
    /// Probability that one round reads a ground-state atom as excited.
    #[serde(default)]
    pub misread_ground: f64,
    /// Probability that one round reads an excited atom as ground.
    #[serde(default)]
    pub misread_excited: f64,
}

fn one() -> u32 {
    1
}

/// The reference laser's free-running noise.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Laser {
    /// Label of the laser ("room-temperature cavity").
    #[serde(default)]
    pub label: String,
    /// Power-law terms, added.
    #[serde(default)]
    pub noise: Vec<NoiseTerm>,
    /// Optional tabulated spectrum, added to the power-law terms.
    #[serde(default)]
    pub table: Option<SpectrumTable>,
    /// High cut-off f_h of the phase-noise terms (alpha = 1, 2), Hz.
    #[serde(default = "default_cutoff")]
    pub high_cutoff_hz: f64,
    /// Linear frequency drift, fractional per second.
    #[serde(default)]
    pub drift_per_s: f64,
}

fn default_cutoff() -> f64 {
    1e3
}

/// How the laser is steered to the atoms.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Lock {
    /// Attack time of the integrating servo, s (at least one cycle).
    pub attack_time_s: f64,
    /// Where on the line the two-point lock probes.
    #[serde(default)]
    pub operating_point: OperatingPointRule,
}

/// Choice of the lock's operating point.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, Default)]
#[serde(rename_all = "snake_case")]
pub enum OperatingPointRule {
    /// Largest slope-to-projection-noise ratio on the central feature.
    #[default]
    BestSlopeToNoise,
    /// Half of the central feature's height.
    HalfMaximum,
}

impl Design {
    /// Parses a design document from JSON, migrating older schema versions.
    pub fn from_json(text: &str) -> Result<Design, InputError> {
        let value: serde_json::Value = serde_json::from_str(text)
            .map_err(|e| InputError::single("(document)", clip(text, 40), format!("must be JSON: {e}")))?;
        Design::from_value(value)
    }

    /// Parses a design from a JSON value, migrating older schema versions.
    pub fn from_value(value: serde_json::Value) -> Result<Design, InputError> {
        crate::error::check_document_size(&value, "(document)", caps::MAX_DOCUMENT_VALUES, caps::MAX_DOCUMENT_TEXT)?;
        let version = value.get("schema_version").and_then(|v| v.as_u64());
        match version {
            Some(v) if v == SCHEMA_VERSION as u64 => {}
            Some(v) => {
                return Err(InputError::single(
                    "schema_version",
                    v.to_string(),
                    format!("this build reads schema version {SCHEMA_VERSION}"),
                ))
            }
            None => {
                return Err(InputError::single(
                    "schema_version",
                    value.get("schema_version").map(|v| clip(&v.to_string(), 40)).unwrap_or_else(|| "missing".into()),
                    format!("must be the whole number {SCHEMA_VERSION}"),
                ))
            }
        }
        serde_path_to_error::deserialize(value).map_err(|e| {
            let path = crate::error::clip(&e.path().to_string(), crate::error::MAX_QUOTED_CHARS);
            let path = if path == "." || path.trim().is_empty() { "(document)".to_string() } else { path };
            InputError::single(path, "", format!("does not follow the design schema: {}", crate::error::clip(&e.inner().to_string(), crate::error::MAX_QUOTED_CHARS)))
        })
    }

    /// The design as pretty JSON; `from_json(to_json(d)) == d` exactly.
    pub fn to_json(&self) -> String {
        serde_json::to_string_pretty(self).unwrap_or_default()
    }

    /// Checks every field; returns all problems at once.
    pub fn validate(&self) -> Result<(), InputError> {
        let mut c = Checker::new();
        if self.schema_version != SCHEMA_VERSION {
            c.push("schema_version", self.schema_version.to_string(), format!("must be {SCHEMA_VERSION}"));
        }
        if self.name.chars().count() > caps::MAX_NAME_CHARS {
            c.push("name", format!("{} characters", self.name.chars().count()), format!("at most {} characters", caps::MAX_NAME_CHARS));
        }
        for (path, text) in [("transition.label", &self.transition.label), ("laser.label", &self.laser.label)] {
            let n = text.chars().count();
            if n > caps::MAX_NAME_CHARS {
                c.push(path, format!("{n} characters"), format!("at most {} characters", caps::MAX_NAME_CHARS));
            }
        }
        c.range("transition.frequency_hz", self.transition.frequency_hz, caps::MIN_FREQUENCY_HZ, caps::MAX_FREQUENCY_HZ, "Hz");
        if let Some(t) = self.transition.lifetime_s {
            // A clock transition lives far longer than the shortest cycle (1 µs); shorter
            // lifetimes make the two-level propagators stiff beyond use (common practice).
            c.range("transition.lifetime_s", t, caps::MIN_LIFETIME_S, 1e12, "s");
        }
        if let Some(id) = &self.transition.species {
            if crate::species::find(id).is_none() {
                c.push("transition.species", format!("\"{}\"", clip(id, 40)), format!("must be one of the catalog's identifiers: {}", crate::species::ids()));
            }
        }
        if let Some(k) = self.transition.k_alpha {
            c.range("transition.k_alpha", k, -caps::MAX_K_ALPHA, caps::MAX_K_ALPHA, "");
        }
        if self.atoms.count == 0 || self.atoms.count > caps::MAX_ATOMS {
            c.push("atoms.count", self.atoms.count.to_string(), format!("must be a whole number from 1 to {}", caps::MAX_ATOMS));
        }
        if let Entanglement::Squeezed { gain_db } = self.atoms.entanglement {
            c.range("atoms.entanglement.gain_db", gain_db, 0.0, 30.0, "dB");
        }
        self.check_sequence(&mut c);
        let d = &self.detection;
        if d.rounds == 0 || d.rounds > caps::MAX_ROUNDS {
            c.push("detection.rounds", d.rounds.to_string(), format!("must be a whole number from 1 to {}", caps::MAX_ROUNDS));
        }
        c.range("detection.misread_ground", d.misread_ground, 0.0, 0.49, "");
        c.range("detection.misread_excited", d.misread_excited, 0.0, 0.49, "");
        self.check_laser(&mut c);
        let cycle = self.cycle_time_s();
        if cycle.is_finite() && cycle < caps::MIN_CYCLE_S {
            c.push("sequence.segments", format!("cycle of {} s", show(cycle)), format!("one cycle must last at least {} s", caps::MIN_CYCLE_S));
        }
        if c.range("lock.attack_time_s", self.lock.attack_time_s, 0.0, 1e7, "s") && cycle.is_finite() && self.lock.attack_time_s < cycle {
            c.push(
                "lock.attack_time_s",
                format!("{} s", show(self.lock.attack_time_s)),
                format!("must be at least one cycle ({} s): the servo corrects once per cycle", show(cycle)),
            );
        }
        c.finish()
    }

    fn check_sequence(&self, c: &mut Checker) {
        let segs = &self.sequence.segments;
        if segs.is_empty() || segs.len() > caps::MAX_SEGMENTS {
            c.push("sequence.segments", format!("{} segments", segs.len()), format!("must hold 1 to {} segments", caps::MAX_SEGMENTS));
            return;
        }
        let mut pulses = 0;
        for (i, s) in segs.iter().enumerate() {
            let p = format!("sequence.segments[{i}]");
            c.range(&format!("{p}.duration_s"), s.duration_s(), caps::MIN_DURATION_S, caps::MAX_DURATION_S, "s");
            if let Segment::Pulse { area_pi, phase_deg, detuning_offset_hz, .. } = *s {
                pulses += 1;
                if !area_pi.is_finite() || area_pi <= 0.0 || area_pi > caps::MAX_AREA_PI {
                    c.push(format!("{p}.area_pi"), show(area_pi), format!("pulse area in units of pi must be above 0 and at most {}", caps::MAX_AREA_PI));
                }
                c.range(&format!("{p}.phase_deg"), phase_deg, -3600.0, 3600.0, "degrees");
                c.range(&format!("{p}.detuning_offset_hz"), detuning_offset_hz, -1e9, 1e9, "Hz");
            }
        }
        if pulses == 0 {
            c.push("sequence.segments", "no pulse", "a sequence needs at least one pulse");
        }
        let probe_start = segs.iter().position(|s| matches!(s, Segment::Pulse { .. }));
        let probe_end = segs.iter().rposition(|s| matches!(s, Segment::Pulse { .. }));
        if let (Some(a), Some(b)) = (probe_start, probe_end) {
            for (i, s) in segs.iter().enumerate().take(b).skip(a + 1) {
                if let Segment::Dead { .. } = s {
                    c.push(format!("sequence.segments[{i}].kind"), "dead", "dead time cannot stand between two pulses; use a free segment");
                }
            }
            for (i, s) in segs.iter().enumerate() {
                if matches!(s, Segment::Free { .. }) && (i < a || i > b) {
                    c.push(format!("sequence.segments[{i}].kind"), "free", "free evolution belongs between two pulses; use a dead segment outside the probe");
                }
            }
        }
    }

    fn check_laser(&self, c: &mut Checker) {
        let l = &self.laser;
        if l.noise.len() > caps::MAX_NOISE_TERMS {
            c.push("laser.noise", format!("{} terms", l.noise.len()), format!("at most {} terms", caps::MAX_NOISE_TERMS));
        }
        for (i, t) in l.noise.iter().enumerate() {
            t.check(&format!("laser.noise[{i}]"), c);
        }
        if let Some(t) = &l.table {
            t.check("laser.table", c);
        }
        if l.noise.is_empty() && l.table.is_none() {
            c.push("laser.noise", "no terms and no table", "describe the laser by at least one noise term or a table");
        }
        let cycle = self.cycle_time_s();
        if c.above("laser.high_cutoff_hz", l.high_cutoff_hz, 0.0, 1e12, "Hz") && cycle.is_finite() && l.high_cutoff_hz * cycle > caps::MAX_CUTOFF_TIMES_CYCLE {
            c.push(
                "laser.high_cutoff_hz",
                format!("{} Hz", show(l.high_cutoff_hz)),
                format!("times the cycle time ({} s) must be at most {:e}", show(cycle), caps::MAX_CUTOFF_TIMES_CYCLE),
            );
        }
        c.range("laser.drift_per_s", l.drift_per_s, -1e-6, 1e-6, "1/s");
    }

    /// K_alpha of the design's transition: the override `transition.k_alpha`, else the
    /// catalog's value for `transition.species`, else `None`.
    pub fn k_alpha(&self) -> Option<f64> {
        self.transition.k_alpha.or_else(|| self.transition.species.as_deref().and_then(crate::species::find).map(|s| s.k_alpha.value))
    }

    /// Where the design's K_alpha comes from, as a sentence part, or `None` without one.
    pub fn k_alpha_source(&self) -> Option<String> {
        if self.transition.k_alpha.is_some() {
            return Some("the design's override transition.k_alpha".into());
        }
        let sp = self.transition.species.as_deref().and_then(crate::species::find)?;
        Some(format!("the catalog entry {} ({})", sp.id, sp.k_alpha.source))
    }

    /// Duration of one cycle, s, with the detection segments repeated for every round.
    pub fn cycle_time_s(&self) -> f64 {
        let rounds = self.detection.rounds.max(1) as f64;
        self.sequence
            .segments
            .iter()
            .map(|s| match s {
                Segment::Dead { label: DeadLabel::Detection, duration_s } => duration_s * rounds,
                s => s.duration_s(),
            })
            .sum()
    }
}

fn clip(s: &str, n: usize) -> String {
    let mut out: String = s.chars().take(n).collect();
    if s.chars().count() > n {
        out.push('…');
    }
    out
}
