//! Trade-off studies of designs: the optimum probe time, sweeps and maps over any numeric
//! field, and uncertainty bands.
//!
//! - [`optimum`]: the probe time (and optionally the detection rounds) that minimises
//!   sigma_y of the locked laser at a chosen averaging time, with the mechanism that sets it.
//! - [`sweep`]: one-dimensional sweeps (a curve of one [`Output`]) and two-dimensional maps
//!   (with contour lines by marching squares) over fields addressed by [`path::FieldPath`],
//!   for several designs at once, in chunks ([`sweep::GridRun`]) so a worker can report
//!   progress and cancel.
//! - [`bands`]: inputs given as ranges or distributions, propagated by seeded Latin
//!   hypercube (or plain Monte Carlo) sampling to quantile bands on sigma_y(tau) and on
//!   every scalar of the evaluation table.
//!
//! Every study evaluates designs through [`crate::evaluate`]; a point or sample where the
//! changed design is invalid becomes a hole with the reason in a sentence, never NaN.

pub mod bands;
pub mod contour;
pub mod optimum;
pub mod path;
pub mod sweep;

use crate::budget::{LockedModel, StageCache};
use crate::design::Design;
use crate::error::{show, Checker, InputError};
use crate::result::{EvalOptions, Evaluation};
use serde::{Deserialize, Serialize};

pub use bands::{bands, BandRequest, BandResult, BandRun};
pub use optimum::{optimum, Optimum, OptimumRequest};
pub use sweep::{map, sweep, GridRequest, GridResult, GridRun};

/// Caps on the work a study may ask for.
pub mod caps {
    /// Designs studied together in one sweep or map.
    pub const MAX_DESIGNS: usize = 16;
    /// Points along one axis of a sweep or map.
    pub const MAX_AXIS_POINTS: usize = 10_000;
    /// Evaluations of one sweep or map (designs x points).
    pub const MAX_GRID_EVALUATIONS: usize = 100_000;
    /// Contour levels of one map.
    pub const MAX_LEVELS: usize = 64;
    /// Samples of one uncertainty study.
    pub const MAX_SAMPLES: usize = 10_000;
    /// Uncertain fields of one uncertainty study.
    pub const MAX_UNCERTAIN: usize = 32;
    /// Quantiles asked of one uncertainty study.
    pub const MAX_QUANTILES: usize = 16;
}

/// A scalar read off one evaluation, the quantity a sweep or map shows.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "snake_case", deny_unknown_fields)]
pub enum Output {
    /// Allan deviation of the locked laser at `tau_s` (s); `tau_s` must exceed one cycle.
    SigmaAt { tau_s: f64 },
    /// White-frequency level of the locked laser extrapolated to 1 s (fractional).
    #[serde(rename = "sigma_1s_equivalent")]
    Sigma1sEquivalent,
    /// Projection-noise Allan deviation at 1 s (fractional).
    #[serde(rename = "projection_1s")]
    Projection1s,
    /// Dick-effect Allan deviation at 1 s (fractional).
    #[serde(rename = "dick_1s")]
    Dick1s,
    /// Share of the Dick effect in the 1-s-equivalent variance, sigma_Dick^2 / (sigma_QPN^2 + sigma_Dick^2), 0 to 1.
    DickShare,
    /// Averaging time at which the locked laser reaches `target` and stays below, s.
    TimeToTarget { target: f64 },
    /// RMS phase excursion of the free laser over the probe, rad.
    ProbePhaseRmsRad,
    /// Duration of one cycle, s.
    CycleTimeS,
}

impl Output {
    /// Checks the output's own parameters; `path` names where it was given.
    pub fn check(&self, path: &str) -> Result<(), InputError> {
        let mut c = Checker::new();
        match *self {
            Output::SigmaAt { tau_s } => {
                c.above(&format!("{path}.tau_s"), tau_s, 0.0, crate::budget::caps::MAX_TAU_S, "s");
            }
            Output::TimeToTarget { target } => {
                c.above(&format!("{path}.target"), target, 0.0, 1e-6, "");
            }
            _ => {}
        }
        c.finish()
    }

    /// The lightest evaluation options that still give this output exactly as a full
    /// evaluation would: two averaging times and 16 plot points, except for the time to
    /// target, which needs the default averaging-time grid to find where the curve stays below.
    pub fn options(&self) -> EvalOptions {
        let light = EvalOptions { tau_points: 2, plot_points: 16, ..EvalOptions::default() };
        match *self {
            Output::SigmaAt { tau_s } => EvalOptions { tau_max_s: tau_s, ..light },
            Output::TimeToTarget { target } => EvalOptions { target_instability: target, plot_points: 16, ..EvalOptions::default() },
            _ => light,
        }
    }

    /// Whether the output is shown and contoured on a logarithmic scale (all but shares).
    pub fn log_scale(&self) -> bool {
        !matches!(self, Output::DickShare)
    }

    /// A short name with the unit, for legends and messages.
    pub fn label(&self) -> String {
        match *self {
            Output::SigmaAt { tau_s } => format!("sigma_y at {} s", show(tau_s)),
            Output::Sigma1sEquivalent => "1-s-equivalent sigma_y".into(),
            Output::Projection1s => "projection-noise sigma_y at 1 s".into(),
            Output::Dick1s => "Dick-effect sigma_y at 1 s".into(),
            Output::DickShare => "Dick share of the 1-s variance".into(),
            Output::TimeToTarget { target } => format!("time to {} (s)", show(target)),
            Output::ProbePhaseRmsRad => "laser RMS phase over the probe (rad)".into(),
            Output::CycleTimeS => "cycle time (s)".into(),
        }
    }

    /// The output for `design`, computed as the full evaluation computes it; `Err` holds the
    /// reason in a sentence when there is no value (invalid design, target not reached).
    /// Figures of the locked-laser model are read off [`LockedModel`] (no curve, plots or
    /// search for the coherence limit); the time to target needs the whole evaluation.
    /// `cache` keeps the costly stages between calls (see [`StageCache`]).
    pub fn evaluate(&self, design: &Design, cache: &mut StageCache) -> Result<f64, String> {
        if let Output::SigmaAt { tau_s } = *self {
            let cycle = design.cycle_time_s();
            if cycle.is_finite() && cycle >= tau_s {
                return Err(format!("the averaging time {} s is not longer than one cycle ({} s)", show(tau_s), show(cycle)));
            }
        }
        let v = match *self {
            Output::TimeToTarget { .. } => {
                let e = crate::budget::evaluate_with_cache(design, &self.options(), cache).map_err(|e| e.to_string())?;
                return self.read(&e);
            }
            _ => self.from_model(&LockedModel::with_cache(design, cache).map_err(|e| e.to_string())?),
        };
        if v.is_finite() { Ok(v) } else { Err("the evaluation gave no finite value".into()) }
    }

    /// The output read off a prepared model; NaN for the time to target, which needs the
    /// whole curve.
    fn from_model(&self, m: &LockedModel) -> f64 {
        match *self {
            Output::SigmaAt { tau_s } => m.sigma_at(tau_s),
            Output::Sigma1sEquivalent => m.sigma_1s_equivalent(),
            Output::Projection1s => m.projection_1s(),
            Output::Dick1s => m.dick_1s(),
            Output::DickShare => dick_share(m.projection_1s(), m.dick_1s()),
            Output::ProbePhaseRmsRad => m.probe_phase_rms_rad(),
            Output::CycleTimeS => m.cycle_time_s(),
            Output::TimeToTarget { .. } => f64::NAN,
        }
    }

    /// Reads the output off an evaluation made with (at least) [`Output::options`].
    pub fn read(&self, e: &Evaluation) -> Result<f64, String> {
        let v = match *self {
            Output::SigmaAt { .. } => *e.curve.total.last().unwrap_or(&f64::NAN),
            Output::Sigma1sEquivalent => e.sigma_1s_equivalent,
            Output::Projection1s => e.projection.sigma_1s,
            Output::Dick1s => e.dick.sigma_1s,
            Output::DickShare => dick_share(e.projection.sigma_1s, e.dick.sigma_1s),
            Output::TimeToTarget { .. } => match e.target.time_s {
                Some(t) => t,
                None => return Err(format!("the target {} is {}", show(e.target.target), e.target.note)),
            },
            Output::ProbePhaseRmsRad => e.limits.probe_phase_rms_rad,
            Output::CycleTimeS => e.cycle_time_s,
        };
        if v.is_finite() { Ok(v) } else { Err("the evaluation gave no finite value".into()) }
    }
}

/// sigma_Dick^2 / (sigma_QPN^2 + sigma_Dick^2), 0 when both vanish.
fn dick_share(projection_1s: f64, dick_1s: f64) -> f64 {
    let s = projection_1s * projection_1s + dick_1s * dick_1s;
    if s > 0.0 { dick_1s * dick_1s / s } else { 0.0 }
}

/// A seeded generator (SplitMix64) for the sampling of uncertainty studies: the same seed
/// gives the same samples on every platform.
#[derive(Debug, Clone)]
pub struct SplitMix64(pub u64);

impl SplitMix64 {
    /// The next 64 random bits.
    pub fn next_u64(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }
    /// A uniform number strictly inside (0, 1).
    pub fn open01(&mut self) -> f64 {
        ((self.next_u64() >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }
    /// A uniform whole number from 0 to n - 1 (n at least 1).
    pub fn below(&mut self, n: usize) -> usize {
        ((self.open01() * n as f64) as usize).min(n.saturating_sub(1))
    }
}

/// Reads a study request (or any part of one) from JSON; an error names the field path
/// inside the request, prefixed by `what`.
pub fn from_value<T: serde::de::DeserializeOwned>(value: serde_json::Value, what: &str) -> Result<T, InputError> {
    serde_path_to_error::deserialize(value).map_err(|e| {
        let inner = crate::error::clip(&e.path().to_string(), crate::error::MAX_QUOTED_CHARS);
        let path = if inner == "." || inner.trim().is_empty() { if what.is_empty() { "(request)".to_string() } else { what.to_string() } } else if what.is_empty() { inner } else { format!("{what}.{inner}") };
        InputError::single(path, "", format!("does not follow the study schema: {}", crate::error::clip(&e.inner().to_string(), crate::error::MAX_QUOTED_CHARS)))
    })
}

/// Reads a list of designs, each through the design schema; problems are prefixed with
/// `designs[i].`.
pub fn designs_from_value(value: serde_json::Value) -> Result<Vec<Design>, InputError> {
    let serde_json::Value::Array(items) = value else {
        return Err(InputError::single("designs", "", "must be a list of design documents"));
    };
    if items.is_empty() || items.len() > caps::MAX_DESIGNS {
        return Err(InputError::single("designs", format!("{} designs", items.len()), format!("a study takes 1 to {} designs", caps::MAX_DESIGNS)));
    }
    items
        .into_iter()
        .enumerate()
        .map(|(i, v)| {
            Design::from_value(v).map_err(|mut e| {
                for p in &mut e.problems {
                    p.path = format!("designs[{i}].{}", p.path);
                }
                e
            })
        })
        .collect()
}

/// Checks the list of designs of a study: 1 to [`caps::MAX_DESIGNS`].
pub(crate) fn check_designs(designs: &[Design]) -> Result<(), InputError> {
    if designs.is_empty() || designs.len() > caps::MAX_DESIGNS {
        return Err(InputError::single("designs", format!("{} designs", designs.len()), format!("a study takes 1 to {} designs", caps::MAX_DESIGNS)));
    }
    Ok(())
}
