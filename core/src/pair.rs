//! Comparisons of two clocks: the instability of their frequency ratio.
//!
//! A [`PairDocument`] holds two designs `a` and `b`, how they are compared
//! ([`Comparison`]), an optional noise of the link between them ([`Link`]) and the
//! measurement campaign ([`Campaign`], used by [`crate::reach`]). The ratio's fractional
//! frequency is y_R = y_a - y_b; its Allan variance is the sum of independent parts:
//!
//! - **Independent lasers**: each clock is a locked laser with its own budget (the
//!   single-clock engine, [`crate::budget::locked_variances`]); the two budgets add.
//! - **One shared laser, synchronous interrogation**: both clocks probe the same laser in
//!   the same cycle, starting together. The ratio is formed from the two atomic
//!   measurements, so the laser noise enters only through the difference of how the two
//!   sequences sample it. With the normalised sensitivity functions' complex harmonics
//!   g_m/g_0 (IEEE Trans. UFFC 45, 887 (1998); [`crate::dick`]) the aliased
//!   part of the ratio is white with
//!   sigma_y^2(tau) tau = sum_{m>=1} |g_a,m/g_a,0 - g_b,m/g_b,0|^2 S_y(m/T_c),
//!   which vanishes for identical sequences. The laser of design `a` is the shared one (its
//!   fractional noise reaches clock `b` unchanged through a frequency comb); `b`'s laser
//!   block is not used. Both clocks need the same cycle time. Projection noise of both
//!   clocks adds as white frequency noise.
//! - **Correlation (differential) spectroscopy** of the same transition
//!   (Appl. Phys. B 89, 483 (2007); Phys. Rev. Lett. 125, 243602 (2020)): both ensembles
//!   undergo Ramsey interrogation of dark time T with one laser whose phase is randomised
//!   over T (T beyond the laser's coherence), so only the difference phase
//!   Delta phi = 2 pi (nu_a - nu_b) T survives in the correlation of the two read-outs:
//!   with X, Y the ensemble means of the +-1 outcomes, E[X Y] = (C_a C_b / 2) cos(Delta phi),
//!   C the Ramsey contrast (excited-state decay exp(-T/(2 lifetime)) times the read-out
//!   contrast after majority vote). At the operating point Delta phi = pi/2 the slope is
//!   C_a C_b / 2 and, averaging over the uniform common phase theta
//!   (E[cos^2] = 1/2, E[cos^2 sin^2] = 1/8) with E[X^2|theta] = a cos^2 theta + 1/N_a,
//!   a = C_a^2 (1 - 1/N_a) (likewise b), the single-cycle variance of X Y is
//!   V = a b / 8 + a / (2 N_b) + b / (2 N_a) + 1 / (N_a N_b)
//!   (derived here for the product estimator; for one ion each it is 1, as in the cited
//!   papers). Hence sigma_y(tau) = sqrt(V) / (C_a C_b / 2) / (2 pi nu0 T) * sqrt(T_c / tau),
//!   with T_c = T + the longer of the two designs' dead times. The laser's noise level does
//!   not enter; the lifetimes and projection noise set the limit. For one ion each, no
//!   dead time and equal lifetimes tau_e the optimum is T = tau_e/2 with
//!   sigma_y(1 s) = 2 sqrt(e) / (2 pi nu0 sqrt(tau_e / 2)).
//!   For large ensembles this product estimator saturates (the term a b / 8); ellipse
//!   fitting does better and is not modelled.
//! - **Link**: optional power-law noise of the link between the clocks, added.
//!
//! The shared and correlation modes are white frequency noise from one cycle on; their
//! modified Allan variance is the white-FM value sigma^2/2 (continuous-averaging limit).

use crate::allan::{allan_variance_power_law, variance, Variance};
use crate::budget::{check_taus, LockedModel};
use crate::design::{caps as design_caps, Design, SCHEMA_VERSION};
use crate::dick::{dick_sum, fourier_coefficients};
use crate::error::{show, Checker, InputError, Problem};
use crate::noise::{NoiseTerm, Spectrum};
use crate::projection::{operating_point, projection_noise, Readout};
use crate::sensitivity::SensitivityFunction;
use crate::sequence::Probe;
use num_complex::Complex64;
use serde::{Deserialize, Serialize};
use std::f64::consts::PI;

/// Caps on what a pair document and its options control.
pub mod caps {
    /// Sessions in one campaign.
    pub const MAX_SESSIONS: u32 = 100_000;
    /// Longest campaign from the start of the first session to the end of the last, s
    /// (about 100 years).
    pub const MAX_CAMPAIGN_S: f64 = 3.2e9;
    /// Longest session, s (the longest averaging time the engine evaluates).
    pub const MAX_SESSION_S: f64 = 1e9;
    /// Longest correlation-spectroscopy dark time, s.
    pub const MAX_DARK_TIME_S: f64 = 1e5;
    /// Shortest correlation-spectroscopy dark time, s.
    pub const MIN_DARK_TIME_S: f64 = 1e-6;
    /// Most harmonics of the differential Dick sum of the shared-laser mode.
    pub const MAX_PAIR_HARMONICS: usize = 1 << 15;
    /// Relative agreement of the cycle times required for synchronous interrogation.
    pub const CYCLE_MATCH: f64 = 1e-9;
    /// Relative agreement of the transition frequencies required for correlation spectroscopy.
    pub const FREQUENCY_MATCH: f64 = 1e-6;
    /// Points of the optimum-dark-time scan of correlation spectroscopy.
    pub const DARK_TIME_SCAN: usize = 400;
}

/// Relative truncation error at which the differential Dick sum stops.
pub const DIFFERENTIAL_TOLERANCE: f64 = 1e-4;

/// Two clock designs and how they are compared.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PairDocument {
    /// Version of the design schema the two designs follow ([`SCHEMA_VERSION`]).
    pub schema_version: u32,
    /// Free text shown in tables and legends.
    pub name: String,
    pub a: Design,
    pub b: Design,
    pub comparison: Comparison,
    /// Optional noise of the link between the clocks.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub link: Option<Link>,
    pub campaign: Campaign,
}

/// How the two clocks are compared.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "snake_case", deny_unknown_fields)]
pub enum Comparison {
    /// Each clock has its own laser and servo.
    IndependentLasers,
    /// One laser (design `a`'s) probes both clocks in the same cycle, starting together.
    SharedLaser,
    /// Correlation spectroscopy of the same transition with Ramsey dark time `dark_time_s`
    /// (may exceed the laser's coherence).
    Correlation { dark_time_s: f64 },
}

/// Noise of the link between the clocks (fibre, free space, comb), as power laws of the
/// ratio's fractional frequency; absolute units refer to clock `a`'s frequency.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Link {
    #[serde(default)]
    pub label: String,
    pub noise: Vec<NoiseTerm>,
    /// High cut-off of the phase-noise terms (alpha 1, 2), Hz.
    #[serde(default = "default_cutoff")]
    pub high_cutoff_hz: f64,
}

fn default_cutoff() -> f64 {
    1e3
}

/// The measurement campaign.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Campaign {
    /// Number of measurement sessions.
    pub sessions: u32,
    /// Length of one session, s.
    pub session_length_s: f64,
    /// Start-to-start spacing of the sessions, s (at least one session length; ignored for
    /// one session).
    pub spacing_s: f64,
    /// Fraction of each session that yields valid ratio data, above 0 and at most 1.
    pub uptime: f64,
    /// Systematic uncertainty of the ratio per session (fractional, 1 sigma, independent
    /// from session to session).
    pub systematic_per_session: f64,
}

impl Campaign {
    /// From the start of the first session to the end of the last, s.
    pub fn span_s(&self) -> f64 {
        (self.sessions.max(1) - 1) as f64 * self.spacing_s + self.session_length_s
    }
    /// Time with valid data over the whole campaign, s.
    pub fn live_time_s(&self) -> f64 {
        self.sessions as f64 * self.session_length_s * self.uptime
    }
    /// Centres of the sessions, s from the campaign's start.
    pub fn session_centres_s(&self) -> Vec<f64> {
        (0..self.sessions).map(|k| k as f64 * self.spacing_s + self.session_length_s / 2.0).collect()
    }
}

/// Options of a pair evaluation.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PairOptions {
    /// Number of averaging times from one comparison cycle to `tau_max_s`, log-spaced.
    #[serde(default = "default_tau_points")]
    pub tau_points: usize,
    /// Longest averaging time, s.
    #[serde(default = "default_tau_max")]
    pub tau_max_s: f64,
}

fn default_tau_points() -> usize {
    61
}
fn default_tau_max() -> f64 {
    1e6
}

impl Default for PairOptions {
    fn default() -> Self {
        PairOptions { tau_points: default_tau_points(), tau_max_s: default_tau_max() }
    }
}

/// One mechanism of the ratio's budget and its Allan deviation on the curve's grid.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RatioPart {
    /// Identifier: `a.laser`, `a.projection`, `a.dick`, `b.…`, `dick_differential`,
    /// `correlation`, `link`.
    pub id: String,
    /// What it is, in words.
    pub label: String,
    pub sigma: Vec<f64>,
}

/// The correlation-spectroscopy numbers.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CorrelationResult {
    pub dark_time_s: f64,
    /// Ramsey contrasts of a and b (decay and read-out).
    pub contrast_a: f64,
    pub contrast_b: f64,
    /// Single-cycle phase uncertainty of the difference phase, rad.
    pub phase_per_cycle_rad: f64,
    /// Ratio's Allan deviation at 1 s (white frequency noise).
    pub sigma_1s: f64,
    /// Dark time with the lowest instability for these lifetimes and dead times, s (`None`
    /// without decay: longer is always better there, up to the cap).
    pub optimum_dark_time_s: Option<f64>,
    pub sigma_1s_at_optimum: Option<f64>,
}

/// The shared-laser numbers.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SharedResult {
    /// Allan deviation at 1 s of the differential Dick term.
    pub dick_differential_1s: f64,
    /// Allan deviation at 1 s of each clock's Dick term alone (for comparison).
    pub dick_a_alone_1s: f64,
    pub dick_b_alone_1s: f64,
    pub projection_a_1s: f64,
    pub projection_b_1s: f64,
    pub harmonics_summed: usize,
    /// Bound on the relative error of the ratio's white variance from truncating the sum.
    pub truncation_bound_relative: f64,
}

/// The ratio's instability.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PairEvaluation {
    pub comparison: Comparison,
    /// Sampling time of the ratio (the longer cycle, the common cycle, or dark time plus
    /// dead time), s.
    pub cycle_time_s: f64,
    pub tau_s: Vec<f64>,
    /// Allan deviation of the ratio.
    pub total: Vec<f64>,
    /// Modified Allan deviation of the ratio.
    pub mod_total: Vec<f64>,
    pub parts: Vec<RatioPart>,
    /// K_alpha of a and b (override, else catalog), and their difference a - b.
    pub k_alpha_a: Option<f64>,
    pub k_alpha_b: Option<f64>,
    pub delta_k: Option<f64>,
    pub shared: Option<SharedResult>,
    pub correlation: Option<CorrelationResult>,
    /// The model's assumptions, in sentences.
    pub assumptions: Vec<String>,
    /// Findings in sentences.
    pub notes: Vec<String>,
    /// The ratio at the single-clock checkpoints (1 s, 1000 s, one day).
    pub checkpoints: Vec<PairCheckpoint>,
}

/// The ratio's Allan deviation at one named averaging time.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PairCheckpoint {
    /// Averaging time, s.
    pub tau_s: f64,
    /// Allan deviation of the ratio there (fractional); `None` when the averaging time is
    /// shorter than one comparison cycle, where the ratio has no Allan deviation.
    pub sigma: Option<f64>,
}

/// The ratio's Allan deviation at each of [`crate::budget::CHECKPOINTS_S`] from `ratio`
/// (`None` below one comparison cycle).
pub fn ratio_checkpoints(ratio: &Ratio) -> Result<Vec<PairCheckpoint>, InputError> {
    let mut out = Vec::new();
    for &tau in crate::budget::CHECKPOINTS_S.iter() {
        let sigma = if tau >= ratio.cycle_s { Some(libm::sqrt(ratio.at(&[tau])?[0].total)) } else { None };
        out.push(PairCheckpoint { tau_s: tau, sigma });
    }
    Ok(out)
}

impl PairDocument {
    /// Parses a pair document from JSON.
    pub fn from_json(text: &str) -> Result<PairDocument, InputError> {
        let value: serde_json::Value = serde_json::from_str(text).map_err(|e| {
            let head: String = text.chars().take(40).collect();
            InputError::single("pair", head, format!("must be JSON: {e}"))
        })?;
        PairDocument::from_value(value)
    }

    /// Parses a pair document from a JSON value.
    pub fn from_value(value: serde_json::Value) -> Result<PairDocument, InputError> {
        if !value.is_object() {
            return Err(InputError::single("pair", show_json(&value), "must be an object with schema_version, name, a, b, comparison, campaign and optionally link"));
        }
        // Two designs and the pair's own fields.
        crate::error::check_document_size(&value, "pair", 2 * crate::design::caps::MAX_DOCUMENT_VALUES + 1_000, 2 * crate::design::caps::MAX_DOCUMENT_TEXT + 5_000)?;
        serde_path_to_error::deserialize(value).map_err(|e| {
            let path = crate::error::clip(&e.path().to_string(), crate::error::MAX_QUOTED_CHARS);
            let path = if path == "." || path.trim().is_empty() { "pair".to_string() } else { format!("pair.{path}") };
            InputError::single(path, "", format!("does not follow the pair schema: {}", crate::error::clip(&e.inner().to_string(), crate::error::MAX_QUOTED_CHARS)))
        })
    }

    /// The document as pretty JSON; `from_json(to_json(p)) == p` exactly.
    pub fn to_json(&self) -> String {
        serde_json::to_string_pretty(self).unwrap_or_default()
    }

    /// Cycle time of the comparison, s (see [`PairEvaluation::cycle_time_s`]); finite for
    /// validated designs.
    pub fn comparison_cycle_s(&self) -> f64 {
        match self.comparison {
            Comparison::IndependentLasers | Comparison::SharedLaser => self.a.cycle_time_s().max(self.b.cycle_time_s()),
            Comparison::Correlation { dark_time_s } => dark_time_s + dead_time_s(&self.a).max(dead_time_s(&self.b)),
        }
    }

    /// Checks every field of both designs, the comparison, the link and the campaign; all
    /// problems at once, with paths from `pair.`.
    pub fn validate(&self) -> Result<(), InputError> {
        let mut problems: Vec<Problem> = Vec::new();
        let mut c = Checker::new();
        if self.schema_version != SCHEMA_VERSION {
            c.push("pair.schema_version", self.schema_version.to_string(), format!("must be {SCHEMA_VERSION}"));
        }
        if self.name.chars().count() > design_caps::MAX_NAME_CHARS {
            c.push("pair.name", format!("{} characters", self.name.chars().count()), format!("at most {} characters", design_caps::MAX_NAME_CHARS));
        }
        let mut designs_ok = true;
        for (tag, d) in [("a", &self.a), ("b", &self.b)] {
            if let Err(e) = d.validate() {
                designs_ok = false;
                problems.extend(e.problems.into_iter().map(|p| Problem { path: format!("pair.{tag}.{}", p.path), ..p }));
            }
        }
        if designs_ok {
            match self.comparison {
                Comparison::IndependentLasers => {}
                Comparison::SharedLaser => {
                    let (ta, tb) = (self.a.cycle_time_s(), self.b.cycle_time_s());
                    if (ta - tb).abs() > caps::CYCLE_MATCH * ta.max(tb) {
                        c.push(
                            "pair.comparison",
                            format!("cycles of {} s (a) and {} s (b)", show(ta), show(tb)),
                            "synchronous interrogation with one shared laser needs the same cycle time in both designs",
                        );
                    }
                }
                Comparison::Correlation { dark_time_s } => {
                    c.range("pair.comparison.dark_time_s", dark_time_s, caps::MIN_DARK_TIME_S, caps::MAX_DARK_TIME_S, "s");
                    let (na, nb) = (self.a.transition.frequency_hz, self.b.transition.frequency_hz);
                    if (na - nb).abs() > caps::FREQUENCY_MATCH * na.max(nb) {
                        c.push(
                            "pair.comparison",
                            format!("frequencies {} Hz (a) and {} Hz (b)", show(na), show(nb)),
                            "correlation spectroscopy compares the same transition: the two frequencies must agree within 1e-6",
                        );
                    }
                    for (tag, d) in [("a", &self.a), ("b", &self.b)] {
                        if let crate::design::Entanglement::Ghz = d.atoms.entanglement {
                            c.push(format!("pair.{tag}.atoms.entanglement"), "ghz", "correlation spectroscopy is modelled for unentangled or squeezed ensembles only");
                        }
                    }
                }
            }
        }
        if let Some(l) = &self.link {
            if l.noise.is_empty() || l.noise.len() > design_caps::MAX_NOISE_TERMS {
                c.push("pair.link.noise", format!("{} terms", l.noise.len()), format!("must hold 1 to {} terms (leave the link out for none)", design_caps::MAX_NOISE_TERMS));
            }
            for (i, t) in l.noise.iter().enumerate() {
                t.check(&format!("pair.link.noise[{i}]"), &mut c);
            }
            c.above("pair.link.high_cutoff_hz", l.high_cutoff_hz, 0.0, 1e9, "Hz");
        }
        let k = &self.campaign;
        if k.sessions == 0 || k.sessions > caps::MAX_SESSIONS {
            c.push("pair.campaign.sessions", k.sessions.to_string(), format!("must be a whole number from 1 to {}", caps::MAX_SESSIONS));
        }
        if c.range("pair.campaign.session_length_s", k.session_length_s, 0.0, caps::MAX_SESSION_S, "s") && designs_ok {
            let cycle = self.comparison_cycle_s();
            if cycle.is_finite() && k.session_length_s < cycle {
                c.push(
                    "pair.campaign.session_length_s",
                    format!("{} s", show(k.session_length_s)),
                    format!("a session must last at least one cycle of the comparison ({} s)", show(cycle)),
                );
            }
        }
        if k.sessions > 1 && c.range("pair.campaign.spacing_s", k.spacing_s, 0.0, caps::MAX_CAMPAIGN_S, "s") && k.spacing_s < k.session_length_s {
            c.push("pair.campaign.spacing_s", format!("{} s", show(k.spacing_s)), format!("sessions cannot overlap: the spacing must be at least the session length ({} s)", show(k.session_length_s)));
        }
        if k.sessions <= 1 && !(k.spacing_s.is_finite() && k.spacing_s >= 0.0) {
            c.push("pair.campaign.spacing_s", show(k.spacing_s), "must be a finite number of seconds, 0 or more");
        }
        let span = k.span_s();
        if c.is_ok() && span > caps::MAX_CAMPAIGN_S {
            c.push("pair.campaign", format!("{} s from first to last session", show(span)), format!("a campaign may span at most {:e} s", caps::MAX_CAMPAIGN_S));
        }
        if !k.uptime.is_finite() || k.uptime <= 0.0 || k.uptime > 1.0 {
            c.push("pair.campaign.uptime", show(k.uptime), "must be above 0 and at most 1 (the fraction of each session with valid data)");
        }
        c.range("pair.campaign.systematic_per_session", k.systematic_per_session, 0.0, 1e-6, "");
        if let Err(e) = c.finish() {
            problems.extend(e.problems);
        }
        if problems.is_empty() { Ok(()) } else { Err(InputError { problems }) }
    }
}

fn show_json(v: &serde_json::Value) -> String {
    let t = v.to_string();
    t.chars().take(40).collect()
}

fn check_options(o: &PairOptions, cycle: f64) -> Result<(), InputError> {
    let mut c = Checker::new();
    if o.tau_points < 2 || o.tau_points > crate::budget::caps::MAX_TAU_POINTS {
        c.push("options.tau_points", o.tau_points.to_string(), format!("must be from 2 to {}", crate::budget::caps::MAX_TAU_POINTS));
    }
    if c.range("options.tau_max_s", o.tau_max_s, 0.0, crate::budget::caps::MAX_TAU_S, "s") && o.tau_max_s <= cycle {
        c.push("options.tau_max_s", format!("{} s", show(o.tau_max_s)), format!("must exceed one comparison cycle ({} s)", show(cycle)));
    }
    c.finish()
}

/// Dead time of a design: its cycle minus the probe (first to last pulse), s.
pub fn dead_time_s(d: &Design) -> f64 {
    (d.cycle_time_s() - Probe::from_design(d).duration_s()).max(0.0)
}

/// Ramsey contrast of a design's ensemble after a dark time: excited-state decay
/// exp(-T/(2 lifetime)) (decay of the coherence) times the read-out contrast after majority
/// vote (1 - e_g - e_e).
pub fn ramsey_contrast(d: &Design, dark_time_s: f64) -> f64 {
    let decay = d.transition.lifetime_s.map(|t| libm::exp(-dark_time_s / (2.0 * t))).unwrap_or(1.0);
    decay * Readout::from_design(d).contrast()
}

/// Single-cycle variance of the product X Y of the two ensembles' mean +-1 outcomes at the
/// operating point Delta phi = pi/2, with contrasts `ca`, `cb` and atom numbers `na`, `nb`
/// (see the module documentation): V = a b/8 + a/(2 n_b) + b/(2 n_a) + 1/(n_a n_b).
pub fn correlation_product_variance(ca: f64, cb: f64, na: f64, nb: f64) -> f64 {
    let a = ca * ca * (1.0 - 1.0 / na);
    let b = cb * cb * (1.0 - 1.0 / nb);
    a * b / 8.0 + a / (2.0 * nb) + b / (2.0 * na) + 1.0 / (na * nb)
}

/// Correlation spectroscopy: Allan deviation at 1 s of the ratio and the numbers behind it,
/// for dark time `t` (the designs are validated, same transition).
fn correlation_sigma_1s(a: &Design, b: &Design, t: f64) -> (f64, f64, f64, f64) {
    let (ca, cb) = (ramsey_contrast(a, t), ramsey_contrast(b, t));
    let na = ensemble_size(a);
    let nb = ensemble_size(b);
    let v = correlation_product_variance(ca, cb, na, nb);
    let slope = ca * cb / 2.0;
    let phase = if slope > 0.0 { libm::sqrt(v) / slope } else { f64::INFINITY };
    let cycle = t + dead_time_s(a).max(dead_time_s(b));
    let nu0 = a.transition.frequency_hz;
    let sigma = phase / (2.0 * PI * nu0 * t) * libm::sqrt(cycle);
    (sigma, ca, cb, phase)
}

/// Atoms counted in the product's noise: the count, divided by the squeezing factor.
fn ensemble_size(d: &Design) -> f64 {
    match d.atoms.entanglement {
        crate::design::Entanglement::Squeezed { gain_db } => d.atoms.count as f64 * libm::pow(10.0, gain_db / 10.0),
        _ => d.atoms.count as f64,
    }
}

/// A prepared comparison: the ratio's variance at any averaging time.
pub struct Ratio {
    pub doc: PairDocument,
    pub cycle_s: f64,
    kind: RatioKind,
    link: Option<Spectrum>,
    /// g(t) of a and b (None for correlation spectroscopy).
    pub sensitivity: Option<(SensitivityFunction, SensitivityFunction)>,
}

enum RatioKind {
    /// The two locked-laser models.
    Independent(Box<(LockedModel, LockedModel)>),
    /// White frequency-noise parts as sigma^2 at 1 s, with ids and labels.
    White(Vec<(&'static str, String, f64)>),
}

/// One averaging time of the ratio: variances by part (in [`Ratio::part_ids`] order), the
/// total Allan variance and the modified Allan variance.
#[derive(Debug, Clone, PartialEq)]
pub struct RatioPoint {
    pub parts: Vec<f64>,
    pub total: f64,
    pub modified: f64,
}

impl Ratio {
    /// Validates the document and prepares the ratio's model. Returns the shared-laser and
    /// correlation numbers alongside.
    pub fn prepare(doc: &PairDocument) -> Result<(Ratio, Option<SharedResult>, Option<CorrelationResult>), InputError> {
        doc.validate()?;
        let cycle_s = doc.comparison_cycle_s();
        let link = doc.link.as_ref().map(|l| {
            let nu0 = doc.a.transition.frequency_hz;
            Spectrum::power_laws(&l.noise.iter().map(|t| t.h(nu0)).collect::<Vec<_>>(), l.high_cutoff_hz)
        });
        let gfs = |d: &Design| -> Result<(SensitivityFunction, f64), InputError> {
            let probe = Probe::from_design(d);
            let ro = Readout::from_design(d);
            let op = operating_point(&probe, &ro, d.lock.operating_point)?;
            let proj = projection_noise(d, &op, d.cycle_time_s());
            Ok((SensitivityFunction::new(&probe, op.detuning_hz)?, proj.sigma_1s))
        };
        let tag = |t: &str, e: InputError| InputError { problems: e.problems.into_iter().map(|p| Problem { path: format!("pair.{t}.{}", p.path), ..p }).collect() };
        match doc.comparison {
            Comparison::IndependentLasers => {
                let (ga, _) = gfs(&doc.a).map_err(|e| tag("a", e))?;
                let (gb, _) = gfs(&doc.b).map_err(|e| tag("b", e))?;
                let ma = LockedModel::new(&doc.a).map_err(|e| tag("a", e))?;
                let mb = LockedModel::new(&doc.b).map_err(|e| tag("b", e))?;
                let kind = RatioKind::Independent(Box::new((ma, mb)));
                Ok((Ratio { doc: doc.clone(), cycle_s, kind, link, sensitivity: Some((ga, gb)) }, None, None))
            }
            Comparison::SharedLaser => {
                let (ga, pa) = gfs(&doc.a).map_err(|e| tag("a", e))?;
                let (gb, pb) = gfs(&doc.b).map_err(|e| tag("b", e))?;
                let spec = Spectrum::from_laser(&doc.a.laser, doc.a.transition.frequency_hz);
                let diff = differential_dick(&ga, &gb, &spec, pa * pa + pb * pb);
                let shared = SharedResult {
                    dick_differential_1s: libm::sqrt(diff.variance),
                    dick_a_alone_1s: libm::sqrt(diff.alone_a),
                    dick_b_alone_1s: libm::sqrt(diff.alone_b),
                    projection_a_1s: pa,
                    projection_b_1s: pb,
                    harmonics_summed: diff.harmonics,
                    truncation_bound_relative: diff.bound_relative,
                };
                let parts = vec![
                    ("a.projection", "projection noise of a".to_string(), pa * pa),
                    ("b.projection", "projection noise of b".to_string(), pb * pb),
                    ("dick_differential", "laser noise sampled differently by the two sequences (differential Dick effect)".to_string(), diff.variance),
                ];
                Ok((Ratio { doc: doc.clone(), cycle_s, kind: RatioKind::White(parts), link, sensitivity: Some((ga, gb)) }, Some(shared), None))
            }
            Comparison::Correlation { dark_time_s } => {
                let (sigma, ca, cb, phase) = correlation_sigma_1s(&doc.a, &doc.b, dark_time_s);
                if !sigma.is_finite() || sigma <= 0.0 {
                    return Err(InputError::single("pair.comparison.dark_time_s", format!("{} s", show(dark_time_s)), "leaves no Ramsey contrast (decay or read-out errors): choose a shorter dark time"));
                }
                let has_decay = doc.a.transition.lifetime_s.is_some() || doc.b.transition.lifetime_s.is_some();
                let (mut opt_t, mut opt_s) = (None, None);
                if has_decay {
                    // Scan log-spaced dark times from 1e-6 s up to the cap.
                    let (lo, hi) = (libm::log(caps::MIN_DARK_TIME_S), libm::log(caps::MAX_DARK_TIME_S));
                    let mut best = (f64::INFINITY, 0.0);
                    let n = caps::DARK_TIME_SCAN;
                    let mut k_best = 0;
                    let s_at = |lt: f64| correlation_sigma_1s(&doc.a, &doc.b, libm::exp(lt)).0;
                    for k in 0..n {
                        let lt = lo + (hi - lo) * k as f64 / (n - 1) as f64;
                        let s = s_at(lt);
                        if s < best.0 {
                            best = (s, lt);
                            k_best = k;
                        }
                    }
                    // Golden-section refinement between the neighbours of the best grid point.
                    let step = (hi - lo) / (n - 1) as f64;
                    let (mut x0, mut x1) = (lo + step * k_best.saturating_sub(1) as f64, lo + step * (k_best + 1).min(n - 1) as f64);
                    let gr = 0.5 * (libm::sqrt(5.0) - 1.0);
                    for _ in 0..60 {
                        let (c1, c2) = (x1 - gr * (x1 - x0), x0 + gr * (x1 - x0));
                        if s_at(c1) < s_at(c2) { x1 = c2 } else { x0 = c1 }
                    }
                    let lt = 0.5 * (x0 + x1);
                    let s = s_at(lt);
                    let (lt, s) = if s < best.0 { (lt, s) } else { (best.1, best.0) };
                    if s.is_finite() {
                        opt_t = Some(libm::exp(lt));
                        opt_s = Some(s);
                    }
                }
                let corr = CorrelationResult { dark_time_s, contrast_a: ca, contrast_b: cb, phase_per_cycle_rad: phase, sigma_1s: sigma, optimum_dark_time_s: opt_t, sigma_1s_at_optimum: opt_s };
                let parts = vec![("correlation", "projection noise of the correlated read-out with excited-state decay (laser noise cancels)".to_string(), sigma * sigma)];
                Ok((Ratio { doc: doc.clone(), cycle_s, kind: RatioKind::White(parts), link, sensitivity: None }, None, Some(corr)))
            }
        }
    }

    /// Identifiers and labels of the parts, in the order of [`RatioPoint::parts`].
    pub fn part_ids(&self) -> Vec<(String, String)> {
        let mut out: Vec<(String, String)> = match &self.kind {
            RatioKind::Independent(_) => {
                let mut v = Vec::new();
                for t in ["a", "b"] {
                    v.push((format!("{t}.laser"), format!("laser noise the servo of {t} leaves")));
                    v.push((format!("{t}.projection"), format!("projection noise of {t}")));
                    v.push((format!("{t}.dick"), format!("Dick effect of {t}")));
                }
                v
            }
            RatioKind::White(p) => p.iter().map(|(id, label, _)| (id.to_string(), label.clone())).collect(),
        };
        if self.link.is_some() {
            out.push(("link".into(), "link between the clocks".into()));
        }
        out
    }

    /// The ratio at each averaging time of `taus_s` (s; each within (0, 1e9]).
    pub fn at(&self, taus_s: &[f64]) -> Result<Vec<RatioPoint>, InputError> {
        check_taus(taus_s)?;
        let mut out: Vec<RatioPoint> = match &self.kind {
            RatioKind::Independent(m) => taus_s
                .iter()
                .map(|&tau| {
                    let ((pa, ma), (pb, mb)) = (m.0.variances(tau), m.1.variances(tau));
                    let parts = vec![pa[0], pa[1], pa[2], pb[0], pb[1], pb[2]];
                    RatioPoint { total: parts.iter().sum(), parts, modified: ma + mb }
                })
                .collect(),
            RatioKind::White(p) => taus_s
                .iter()
                .map(|&tau| {
                    let parts: Vec<f64> = p.iter().map(|(_, _, s2)| s2 / tau).collect();
                    let total: f64 = parts.iter().sum();
                    RatioPoint { parts, total, modified: total / 2.0 }
                })
                .collect(),
        };
        if let Some(spec) = &self.link {
            let features = spec.breakpoints();
            for (pt, &tau) in out.iter_mut().zip(taus_s) {
                let v: f64 = spec.terms.iter().map(|&(a, h)| allan_variance_power_law(a, h, tau, spec.f_high)).sum();
                let m = variance(&|f| spec.s_y(f), tau, Variance::Modified, &features);
                pt.parts.push(v);
                pt.total += v;
                pt.modified += m;
            }
        }
        Ok(out)
    }
}

/// Result of the differential Dick sum.
struct Differential {
    /// sigma^2 tau of the differential term (the partial sum, a lower bound).
    variance: f64,
    alone_a: f64,
    alone_b: f64,
    harmonics: usize,
    bound_relative: f64,
}

/// sum_m |g_a,m/g_a,0 - g_b,m/g_b,0|^2 S_y(m/T_c), summed until the remainder's bound
/// (Minkowski: (sqrt(R_a) + sqrt(R_b))^2 with R the remainders of the single-clock Dick sums,
/// known from [`dick_sum`] within its stated truncation bound) falls below
/// [`DIFFERENTIAL_TOLERANCE`] of the ratio's white variance `white_other` + the sum, or the
/// harmonic cap is reached.
fn differential_dick(ga: &SensitivityFunction, gb: &SensitivityFunction, spec: &Spectrum, white_other: f64) -> Differential {
    let tc = ga.cycle_s;
    let da = dick_sum(ga, spec);
    let db = dick_sum(gb, spec);
    let (a0, b0) = (ga.g0(), gb.g0());
    // As in the single Dick sum, the harmonics are capped by the work they cost: one term
    // per piece of g(t) per harmonic ([`crate::dick::MAX_PIECE_HARMONICS`]).
    let pieces = ga.pieces.len().max(gb.pieces.len()).max(1);
    let max_m = caps::MAX_PAIR_HARMONICS.min(crate::dick::MAX_PIECE_HARMONICS / pieces).max(256);
    let mut m = 256usize;
    loop {
        let ca = fourier_coefficients(ga, m);
        let cb = fourier_coefficients(gb, m);
        let (mut pd, mut pa, mut pb) = (0.0, 0.0, 0.0);
        for k in 0..m {
            let s = spec.s_y((k + 1) as f64 / tc);
            let (x, y): (Complex64, Complex64) = (ca[k] / a0, cb[k] / b0);
            pd += (x - y).norm_sqr() * s;
            pa += x.norm_sqr() * s;
            pb += y.norm_sqr() * s;
        }
        let ra = (da.variance_coefficient * (1.0 + da.truncation_bound_relative) - pa).max(0.0);
        let rb = (db.variance_coefficient * (1.0 + db.truncation_bound_relative) - pb).max(0.0);
        let bound = (libm::sqrt(ra) + libm::sqrt(rb)) * (libm::sqrt(ra) + libm::sqrt(rb));
        let scale = white_other + pd;
        let rel = if scale > 0.0 { bound / scale } else { 0.0 };
        if rel <= DIFFERENTIAL_TOLERANCE || m >= max_m {
            return Differential { variance: pd, alone_a: da.variance_coefficient, alone_b: db.variance_coefficient, harmonics: m, bound_relative: rel };
        }
        m *= 2;
    }
}

fn log_grid(a: f64, b: f64, n: usize) -> Vec<f64> {
    let (la, lb) = (libm::log(a), libm::log(b));
    // The ends exactly a and b (exp(ln b) may round above a cap).
    (0..n).map(|k| if k == 0 { a } else if k == n - 1 { b } else { libm::exp(la + (lb - la) * k as f64 / (n - 1) as f64) }).collect()
}

/// Evaluates the ratio of a pair: validates the document, then the ratio's Allan and
/// modified Allan deviation from one comparison cycle to `tau_max_s`, with its breakdown.
pub fn evaluate_pair(doc: &PairDocument, opt: &PairOptions) -> Result<PairEvaluation, InputError> {
    doc.validate()?;
    check_options(opt, doc.comparison_cycle_s())?;
    let (ratio, shared, correlation) = Ratio::prepare(doc)?;
    let taus = log_grid(ratio.cycle_s, opt.tau_max_s, opt.tau_points);
    let points = ratio.at(&taus)?;
    let ids = ratio.part_ids();
    let parts = ids
        .iter()
        .enumerate()
        .map(|(i, (id, label))| RatioPart { id: id.clone(), label: label.clone(), sigma: points.iter().map(|p| libm::sqrt(p.parts[i])).collect() })
        .collect();
    let total = points.iter().map(|p| libm::sqrt(p.total)).collect();
    let mod_total = points.iter().map(|p| libm::sqrt(p.modified)).collect();
    let (ka, kb) = (doc.a.k_alpha(), doc.b.k_alpha());
    let delta_k = match (ka, kb) {
        (Some(x), Some(y)) => Some(x - y),
        _ => None,
    };
    let mut assumptions = vec!["The ratio's fractional frequency is y_a - y_b; independent mechanisms add in variance.".to_string()];
    let mut notes = Vec::new();
    match doc.comparison {
        Comparison::IndependentLasers => assumptions.push("Each clock is a laser locked to its atoms with its own servo; the two budgets are those of the single-clock engine.".into()),
        Comparison::SharedLaser => {
            assumptions.push("One laser (design a's) probes both clocks in the same cycle, starting together; b's laser block is not used.".into());
            assumptions.push("The ratio is formed from the two atomic measurements: the laser noise cancels except through the difference of the normalised sensitivity functions (differential Dick effect); the result is white frequency noise from one cycle on.".into());
        }
        Comparison::Correlation { .. } => {
            assumptions.push("Correlation spectroscopy: Ramsey interrogation of the same transition in both clocks with one laser whose phase is uniformly random over the dark time; the difference phase is read from the correlation of the two read-outs (product estimator).".into());
            assumptions.push("Decay is modelled as loss of Ramsey contrast exp(-T/(2 lifetime)); the population offset it causes is assumed removed with the means.".into());
        }
    }
    if doc.link.is_some() {
        assumptions.push("The link's noise is independent of both clocks.".into());
    }
    if let Some(s) = &shared {
        let alone = s.dick_a_alone_1s.max(s.dick_b_alone_1s);
        if alone > 0.0 {
            notes.push(format!("Synchronous interrogation leaves {:.1e} of the single-clock Dick level ({:.2e} at 1 s) in the ratio.", s.dick_differential_1s / alone, alone));
        }
        if s.truncation_bound_relative > DIFFERENTIAL_TOLERANCE {
            notes.push(format!("The differential Dick sum stopped at {} harmonics with a relative bound of {:.1e}.", s.harmonics_summed, s.truncation_bound_relative));
        }
    }
    if let Some(c) = &correlation {
        if let (Some(t), Some(s)) = (c.optimum_dark_time_s, c.sigma_1s_at_optimum) {
            notes.push(format!("The lowest instability, {s:.2e} at 1 s, needs a dark time of {t:.3} s (the lifetimes and dead time set it)."));
        }
        // The common phase must be randomised for the product estimator: compare the laser's
        // RMS phase excursion over the dark time (free laser of design a) with pi.
        let spec = Spectrum::from_laser(&doc.a.laser, doc.a.transition.frequency_hz);
        let t = c.dark_time_s;
        let sig2: f64 = spec.terms.iter().map(|&(a, h)| allan_variance_power_law(a, h, t, spec.f_high)).sum();
        let phase = 2.0 * PI * doc.a.transition.frequency_hz * t * libm::sqrt(2.0 * sig2.max(0.0));
        if spec.table.is_none() && phase < PI {
            notes.push(format!("Laser a stays coherent over the dark time (RMS phase {phase:.2} rad): the common phase is not randomised and the product estimator loses its basis; the shared-laser mode fits better."));
        }
    }
    match delta_k {
        None => notes.push("K_alpha is not known for both clocks (set transition.species or transition.k_alpha): no sensitivity to alpha is computed.".into()),
        Some(dk) if dk == 0.0 => notes.push("Both clocks have the same K_alpha: the ratio has no sensitivity to alpha.".into()),
        _ => {}
    }
    let checkpoints = ratio_checkpoints(&ratio)?;
    let out = PairEvaluation {
        comparison: doc.comparison,
        cycle_time_s: ratio.cycle_s,
        tau_s: taus,
        total,
        mod_total,
        parts,
        k_alpha_a: ka,
        k_alpha_b: kb,
        delta_k,
        shared,
        correlation,
        assumptions,
        notes,
        checkpoints,
    };
    crate::finite::require_finite(&out, "result")?;
    Ok(out)
}
