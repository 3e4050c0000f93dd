//! What an evaluation returns: every number the page, the headless entry and the checks read.

use serde::{Deserialize, Serialize};

/// Options of one evaluation that are not part of the design.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct EvalOptions {
    /// Instability whose reaching time is reported (fractional).
    #[serde(default = "default_target")]
    pub target_instability: f64,
    /// Number of averaging times from one cycle to `tau_max_s`, log-spaced.
    #[serde(default = "default_tau_points")]
    pub tau_points: usize,
    /// Longest averaging time, s.
    #[serde(default = "default_tau_max")]
    pub tau_max_s: f64,
    /// Points of the line shape and of g(t) returned for plotting.
    #[serde(default = "default_plot_points")]
    pub plot_points: usize,
}

fn default_target() -> f64 {
    1e-18
}
fn default_tau_points() -> usize {
    61
}
fn default_tau_max() -> f64 {
    1e6
}
fn default_plot_points() -> usize {
    161
}

impl Default for EvalOptions {
    fn default() -> Self {
        EvalOptions { target_instability: default_target(), tau_points: default_tau_points(), tau_max_s: default_tau_max(), plot_points: default_plot_points() }
    }
}

/// The mechanisms of the budget, as named in breakdowns.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Mechanism {
    /// Free-running laser noise that the servo does not remove (short tau).
    Laser,
    /// Quantum projection noise, including detection misassignment.
    Projection,
    /// Laser noise aliased through the dead time and the probe's sensitivity function.
    Dick,
}

/// Result of evaluating one design.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Evaluation {
    /// Duration of one cycle, s.
    pub cycle_time_s: f64,
    /// From the start of the first pulse to the end of the last, s.
    pub probe_time_s: f64,
    /// Cycle time not spent probing, s.
    pub dead_time_s: f64,
    pub operating_point: OperatingPoint,
    pub projection: ProjectionResult,
    pub dick: DickResult,
    /// White-frequency level of the locked laser extrapolated to 1 s: sqrt(QPN^2 + Dick^2).
    pub sigma_1s_equivalent: f64,
    pub curve: Curve,
    pub target: TargetResult,
    pub limits: Limits,
    pub sensitivity: SensitivitySamples,
    pub line_shape: LineShape,
    /// Allan deviation and dominant mechanism at 1 s, 1000 s and one day.
    pub checkpoints: Vec<Checkpoint>,
}

/// The lock's operating point on the line.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct OperatingPoint {
    /// Laser detuning from line centre at which the lock probes, Hz.
    pub detuning_hz: f64,
    /// Excitation probability there (true atomic state, before detection errors).
    pub excitation: f64,
    /// Probability of reading "excited" there, with detection errors.
    pub measured_excitation: f64,
    /// Slope of the measured excitation, 1/Hz.
    pub slope_per_hz: f64,
    /// Detuning of the best slope-to-noise point, Hz.
    pub best_detuning_hz: f64,
    /// Detuning of the half-maximum point, Hz.
    pub half_maximum_detuning_hz: f64,
    /// Peak excitation of the central feature.
    pub peak_excitation: f64,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ProjectionResult {
    /// Projection-noise Allan deviation at 1 s (white, sigma(tau) = this / sqrt(tau)).
    pub sigma_1s: f64,
    /// Atoms counted in the noise (1 for a GHZ state read out as one parity).
    pub effective_atoms: f64,
    /// Misassignment after majority vote: ground read as excited, excited read as ground.
    pub misread_ground_effective: f64,
    pub misread_excited_effective: f64,
    /// Variance factor of entanglement (xi^2; 1 without).
    pub squeezing_factor: f64,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DickResult {
    /// Dick-effect Allan deviation at 1 s (white, sigma(tau) = this / sqrt(tau)).
    pub sigma_1s: f64,
    /// Harmonics summed exactly before the analytic tail.
    pub harmonics_summed: usize,
    /// Bound on the relative error of the Dick variance from truncating the harmonic sum.
    pub truncation_bound_relative: f64,
    /// |g_m|^2 / g_0^2 for m = 1, 2, ... (the first few).
    pub weights: Vec<f64>,
    /// g_0 = (1/T_c) integral of g(t) dt.
    pub g0: f64,
}

/// Allan deviation of the locked laser against averaging time, with its breakdown.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Curve {
    pub tau_s: Vec<f64>,
    pub total: Vec<f64>,
    pub laser: Vec<f64>,
    pub projection: Vec<f64>,
    pub dick: Vec<f64>,
    /// Modified Allan deviation of the locked laser.
    pub mod_total: Vec<f64>,
    /// Allan deviation of the free-running laser (for reference; drift included).
    pub free_laser: Vec<f64>,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct TargetResult {
    pub target: f64,
    /// Averaging time at which the locked laser reaches the target and stays below, s.
    pub time_s: Option<f64>,
    /// Why `time_s` is absent, or how it was found.
    pub note: String,
    /// The mechanism with the largest share of the variance at `time_s` (absent with it).
    pub dominant: Option<Mechanism>,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Limits {
    /// RMS phase excursion of the free laser over the probe time, rad (N-fold for GHZ).
    pub probe_phase_rms_rad: f64,
    /// Longest probe time before the RMS phase excursion reaches 1 rad, s (None above 1e5 s).
    pub coherence_probe_limit_s: Option<f64>,
    /// Probe time over the excited-state lifetime (0 without decay).
    pub probe_over_lifetime: f64,
    /// Constant frequency error that the laser drift leaves behind the integrating servo (fractional).
    pub servo_lag_fractional: f64,
    /// Findings in sentences.
    pub notes: Vec<String>,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Checkpoint {
    pub tau_s: f64,
    pub total: f64,
    pub laser: f64,
    pub projection: f64,
    pub dick: f64,
    pub dominant: Mechanism,
}

/// g(t) over one cycle, normalised so that its largest magnitude is 1 and its mean positive.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SensitivitySamples {
    pub t_s: Vec<f64>,
    pub g: Vec<f64>,
}

/// Excitation against laser detuning around line centre.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct LineShape {
    pub detuning_hz: Vec<f64>,
    /// True excitation probability.
    pub excitation: Vec<f64>,
    /// Probability of reading "excited", with detection errors.
    pub measured: Vec<f64>,
}
