//! The budget of the locked laser: laser noise the servo leaves, projection noise and the
//! Dick effect combined into sigma_y(tau) and mod sigma_y(tau) with a breakdown.
//!
//! Model (common practice): an integrating servo of attack time T_s acts as a first-order
//! loop, H(f) = 1/(1 + i 2 pi f T_s). The locked laser's fractional frequency has the
//! spectrum S_lock(f) = |1 - H|^2 S_laser(f) + |H|^2 h0_atoms, where the atom-side noise
//! is white with h0_atoms = 2 (sigma_QPN,1s^2 + sigma_Dick,1s^2). The mechanisms are
//! independent, so their variances add. A linear drift D of the free laser leaves a
//! constant lag D T_s behind a first-order integrator and no Allan variance.

use crate::allan::*;
use crate::design::Design;
use crate::dick::dick_sum;
use crate::error::{Checker, InputError};
use crate::noise::Spectrum;
use crate::projection::{operating_point, projection_noise, Readout};
use crate::result::*;
use crate::sensitivity::SensitivityFunction;
use crate::sequence::Probe;
use std::f64::consts::PI;

/// One day, s.
pub const DAY_S: f64 = 86_400.0;
/// Averaging times of the comparison checkpoints, s.
pub const CHECKPOINTS_S: [f64; 3] = [1.0, 1000.0, DAY_S];

/// Caps on evaluation options.
pub mod caps {
    /// Averaging times of one curve (15 per decade over ten decades; each costs one set of
    /// transfer-function integrals when the spectrum needs them, so the cap bounds the time).
    pub const MAX_TAU_POINTS: usize = 150;
    pub const MAX_PLOT_POINTS: usize = 4000;
    pub const MAX_TAU_S: f64 = 1e9;
    /// Line-shape work of one evaluation: plot points times the probe's pulse and free
    /// segments (each point propagates through every segment).
    pub const MAX_LINE_PROPAGATIONS: usize = 20_000;
    /// Work of the Allan integrals over a spectrum table: its rows times the averaging
    /// times (every row is a panel edge at every tau): the default 61 times 200 rows.
    pub const MAX_TABLE_TAU_WORK: usize = 61 * crate::noise::MAX_TABLE_ROWS;
}

fn check_options(o: &EvalOptions, cycle: f64, probe_segments: usize, table_rows: usize) -> Result<(), InputError> {
    let mut c = Checker::new();
    if table_rows > 0 && o.tau_points.saturating_mul(table_rows) > caps::MAX_TABLE_TAU_WORK {
        c.push(
            "options.tau_points",
            o.tau_points.to_string(),
            format!(
                "with a spectrum table of {table_rows} rows at most {} averaging times (rows times averaging times at most {})",
                caps::MAX_TABLE_TAU_WORK / table_rows,
                caps::MAX_TABLE_TAU_WORK
            ),
        );
    }
    c.above("options.target_instability", o.target_instability, 0.0, 1e-6, "");
    if o.tau_points < 2 || o.tau_points > caps::MAX_TAU_POINTS {
        c.push("options.tau_points", o.tau_points.to_string(), format!("must be from 2 to {}", caps::MAX_TAU_POINTS));
    }
    if c.range("options.tau_max_s", o.tau_max_s, 0.0, caps::MAX_TAU_S, "s") && o.tau_max_s <= cycle {
        c.push("options.tau_max_s", format!("{} s", o.tau_max_s), format!("must exceed one cycle ({cycle} s)"));
    }
    if o.plot_points < 16 || o.plot_points > caps::MAX_PLOT_POINTS {
        c.push("options.plot_points", o.plot_points.to_string(), format!("must be from 16 to {}", caps::MAX_PLOT_POINTS));
    } else if o.plot_points.saturating_mul(probe_segments) > caps::MAX_LINE_PROPAGATIONS {
        c.push(
            "options.plot_points",
            o.plot_points.to_string(),
            format!(
                "with {probe_segments} pulse and free segments at most {} plot points (points times segments at most {})",
                (caps::MAX_LINE_PROPAGATIONS / probe_segments.max(1)).max(16),
                caps::MAX_LINE_PROPAGATIONS
            ),
        );
    }
    c.finish()
}

/// The parts of a budget that do not depend on tau.
struct Model {
    spec: Spectrum,
    attack_s: f64,
    h0_projection: f64,
    h0_dick: f64,
    features: Vec<f64>,
    drift: f64,
}

impl Model {
    fn highpass(&self, f: f64) -> f64 {
        let x = 2.0 * PI * f * self.attack_s;
        let x2 = x * x;
        x2 / (1.0 + x2)
    }
    /// Whether the laser is made of frequency-noise power laws only (alpha <= 0, no table),
    /// for which the filtered variances have closed or tabulated universal forms.
    fn frequency_power_laws_only(&self) -> bool {
        self.spec.table.is_none() && self.spec.terms.iter().all(|&(a, _)| (-2..=0).contains(&a))
    }
    /// Laser noise left by the servo: |1 - H|^2 S_laser. For frequency-noise power laws:
    /// white FM h0 x^2/(1+x^2) = h0 - h0/(1+x^2); random walk h/f^2 x^2/(1+x^2) =
    /// h (2 pi T)^2/(1+x^2); flicker from the tabulated universal shape. Otherwise the
    /// transfer-function integral. `lp` is the low-passed white-FM Allan variance per
    /// unit h0 at this tau (all low-passed terms are linear in their level).
    fn laser_var(&self, tau: f64, lp: f64) -> f64 {
        let t = self.attack_s;
        if self.frequency_power_laws_only() {
            return self
                .spec
                .terms
                .iter()
                .map(|&(a, h)| match a {
                    0 => (h / (2.0 * tau) - h * lp).max(0.0),
                    -1 => allan_variance_flicker_highpass(h, tau, t),
                    _ => h * (2.0 * PI * t) * (2.0 * PI * t) * lp,
                })
                .sum();
        }
        variance(&|f| self.spec.s_y(f) * self.highpass(f), tau, Variance::Allan, &self.features)
    }
    /// Laser, projection and Dick parts of the locked laser's Allan variance at `tau`.
    fn parts(&self, tau: f64) -> [f64; 3] {
        let lp = allan_variance_lowpass_white(1.0, tau, self.attack_s);
        [self.laser_var(tau, lp), self.h0_projection * lp, self.h0_dick * lp]
    }
    fn total(&self, tau: f64) -> f64 {
        libm::sqrt(self.parts(tau).iter().sum())
    }
    fn mod_total(&self, tau: f64) -> f64 {
        let h0 = self.h0_projection + self.h0_dick;
        let t = self.attack_s;
        if self.frequency_power_laws_only() {
            // Modified variance of low-passed white FM per unit h0, shared by every term.
            let lp = mod_variance_lowpass_white(1.0, tau, t);
            let laser: f64 = self
                .spec
                .terms
                .iter()
                .map(|&(a, h)| match a {
                    0 => (h / (4.0 * tau) - h * lp).max(0.0),
                    -1 => mod_variance_flicker_highpass(h, tau, t),
                    _ => h * (2.0 * PI * t) * (2.0 * PI * t) * lp,
                })
                .sum();
            return libm::sqrt(laser + h0 * lp);
        }
        self.mod_total_numeric(tau)
    }
    fn mod_total_numeric(&self, tau: f64) -> f64 {
        let h0 = self.h0_projection + self.h0_dick;
        let s = |f: f64| {
            let x = 2.0 * PI * f * self.attack_s;
            let lp = 1.0 / (1.0 + x * x);
            self.spec.s_y(f) * self.highpass(f) + h0 * lp
        };
        libm::sqrt(variance(&s, tau, Variance::Modified, &self.features))
    }
    /// Free-running laser, drift included: closed forms for the power laws
    /// (IEEE Std 1139-2008), the transfer-function integral for a table.
    fn free_var(&self, tau: f64, with_drift: bool) -> f64 {
        let table = if self.spec.table.is_some() { variance(&|f| self.spec.table_s_y(f), tau, Variance::Allan, &self.features) } else { 0.0 };
        self.free_var_with(tau, table, with_drift)
    }
    /// [`Model::free_var`] given the table's Allan variance at `tau`.
    fn free_var_with(&self, tau: f64, table_var: f64, with_drift: bool) -> f64 {
        let mut v: f64 = self.spec.terms.iter().map(|&(a, h)| allan_variance_power_law(a, h, tau, self.spec.f_high)).sum();
        if self.spec.table.is_some() {
            v += table_var;
        }
        if with_drift {
            v += self.drift * self.drift * tau * tau / 2.0;
        }
        v
    }
    /// One point of the curve: `(parts, modified deviation, free-running variance with
    /// drift)`, the same numbers as [`Model::parts`], [`Model::mod_total`] and
    /// [`Model::free_var`], with the transfer-function integrals they need computed on
    /// shared nodes (the spectrum evaluated once per node instead of three times).
    fn curve_point(&self, tau: f64) -> ([f64; 3], f64, f64) {
        if self.frequency_power_laws_only() {
            return (self.parts(tau), self.mod_total(tau), self.free_var(tau, true));
        }
        let lp = allan_variance_lowpass_white(1.0, tau, self.attack_s);
        let h0 = self.h0_projection + self.h0_dick;
        let locked = |f: f64, sy: f64| {
            let x = 2.0 * PI * f * self.attack_s;
            let lpf = 1.0 / (1.0 + x * x);
            let laser = sy * self.highpass(f);
            (laser, laser + h0 * lpf)
        };
        let (laser, modv, table) = if self.spec.table.is_some() {
            let s = |f: f64| {
                let (sy, tb) = self.spec.s_y_and_table(f);
                let (l, m) = locked(f, sy);
                [l, m, tb]
            };
            let [l, m, t] = variances(&s, tau, [Variance::Allan, Variance::Modified, Variance::Allan], &self.features);
            (l, m, t)
        } else {
            let s = |f: f64| {
                let (l, m) = locked(f, self.spec.s_y(f));
                [l, m]
            };
            let [l, m] = variances(&s, tau, [Variance::Allan, Variance::Modified], &self.features);
            (l, m, 0.0)
        };
        let parts = [laser, self.h0_projection * lp, self.h0_dick * lp];
        (parts, libm::sqrt(modv), self.free_var_with(tau, table, true))
    }
}

fn dominant(parts: &[f64; 3]) -> Mechanism {
    let mut k = 0;
    for i in 1..3 {
        if parts[i] > parts[k] {
            k = i;
        }
    }
    [Mechanism::Laser, Mechanism::Projection, Mechanism::Dick][k]
}

fn log_grid(a: f64, b: f64, n: usize) -> Vec<f64> {
    let (la, lb) = (libm::log(a), libm::log(b));
    (0..n).map(|k| libm::exp(la + (lb - la) * k as f64 / (n - 1) as f64)).collect()
}

/// The parts of one design's budget that everything else is computed from.
struct Built {
    model: Model,
    probe: Probe,
    ro: Readout,
    op: crate::projection::Operating,
    proj: crate::projection::Projection,
    gf: SensitivityFunction,
    dick: crate::dick::DickSum,
}

/// The costly stages of [`build`] (the operating-point search on the line shape, g(t) and
/// the Dick sum), kept for the most recent distinct inputs, so that studies which change a
/// field those stages do not read (the atom count, the attack time, the laser drift...) do
/// not repeat them. Each stage is a pure function of the values it is keyed on, compared
/// in full, so a hit gives the very numbers a fresh computation would.
#[derive(Default)]
pub struct StageCache {
    operating: Vec<(OperatingKey, crate::projection::Operating)>,
    sensitivity: Vec<(SensitivityKey, (SensitivityFunction, crate::dick::DickSum))>,
}

/// What the operating-point search reads: the probe's steps, decay and detuning factor,
/// the readout and the rule.
#[derive(PartialEq)]
struct OperatingKey {
    steps: Vec<crate::sequence::Step>,
    gamma: f64,
    detuning_factor: f64,
    ro: Readout,
    rule: crate::design::OperatingPointRule,
}

/// What g(t) and the Dick sum read: the whole probe, the operating detuning and the
/// laser's spectrum (its description and the transition frequency).
#[derive(PartialEq)]
struct SensitivityKey {
    probe: Probe,
    detuning_hz: f64,
    laser: crate::design::Laser,
    nu0_hz: f64,
}

/// Entries kept per stage: a map alternates between rows, a sweep between designs.
const STAGE_CACHE_ENTRIES: usize = 8;

fn remember<K, V>(list: &mut Vec<(K, V)>, key: K, value: V) {
    if list.len() == STAGE_CACHE_ENTRIES {
        list.remove(0);
    }
    list.push((key, value));
}

/// Operating point, projection noise, g(t), Dick sum and the budget model of a validated
/// design, the costly stages taken from `cache` when their inputs are unchanged.
fn build_with(d: &Design, cache: &mut StageCache) -> Result<Built, InputError> {
    let cycle = d.cycle_time_s();
    let nu0 = d.transition.frequency_hz;
    let probe = Probe::from_design(d);
    let ro = Readout::from_design(d);
    let op_key = OperatingKey { steps: probe.steps.clone(), gamma: probe.gamma, detuning_factor: probe.detuning_factor, ro, rule: d.lock.operating_point };
    let op = match cache.operating.iter().find(|(k, _)| *k == op_key) {
        Some((_, op)) => *op,
        None => {
            let op = operating_point(&probe, &ro, d.lock.operating_point)?;
            remember(&mut cache.operating, op_key, op);
            op
        }
    };
    let proj = projection_noise(d, &op, cycle);
    let spec = Spectrum::from_laser(&d.laser, nu0);
    let g_key = SensitivityKey { probe: probe.clone(), detuning_hz: op.detuning_hz, laser: d.laser.clone(), nu0_hz: nu0 };
    let (gf, dick) = match cache.sensitivity.iter().find(|(k, _)| *k == g_key) {
        Some((_, stages)) => stages.clone(),
        None => {
            let gf = SensitivityFunction::new(&probe, op.detuning_hz)?;
            let dick = dick_sum(&gf, &spec);
            remember(&mut cache.sensitivity, g_key, (gf.clone(), dick.clone()));
            (gf, dick)
        }
    };
    let attack_s = d.lock.attack_time_s;
    let mut features = spec.breakpoints();
    features.push(1.0 / (2.0 * PI * attack_s));
    let model = Model {
        spec,
        attack_s,
        h0_projection: 2.0 * proj.sigma_1s * proj.sigma_1s,
        h0_dick: 2.0 * dick.variance_coefficient,
        features,
        drift: d.laser.drift_per_s,
    };
    Ok(Built { model, probe, ro, op, proj, gf, dick })
}

/// Largest number of averaging times [`locked_variances`] accepts at once.
pub const MAX_LOCKED_TAUS: usize = 4096;

/// A design's locked-laser model, prepared once (operating point, g(t), Dick sum) and then
/// evaluated at any averaging time, with the same model and numbers as [`evaluate`]. For
/// putting several clocks on one grid of averaging times (comparisons of clocks), and for
/// studies that need one figure of many designs.
pub struct LockedModel {
    model: Model,
    sigma_projection_1s: f64,
    sigma_dick_1s: f64,
    cycle_s: f64,
    probe_phase_rms_rad: f64,
}

impl LockedModel {
    /// Validates the design and prepares its model.
    pub fn new(d: &Design) -> Result<LockedModel, InputError> {
        LockedModel::with_cache(d, &mut StageCache::default())
    }

    /// As [`LockedModel::new`], reusing the costly stages kept in `cache` where their
    /// inputs are unchanged (the numbers are the same as without the cache).
    pub fn with_cache(d: &Design, cache: &mut StageCache) -> Result<LockedModel, InputError> {
        d.validate()?;
        let b = build_with(d, cache)?;
        let probe_phase_rms_rad = phase_rms(&b.model, d.transition.frequency_hz, b.probe.detuning_factor, b.probe.duration_s());
        Ok(LockedModel {
            sigma_projection_1s: b.proj.sigma_1s,
            sigma_dick_1s: libm::sqrt(b.dick.variance_coefficient),
            cycle_s: d.cycle_time_s(),
            probe_phase_rms_rad,
            model: b.model,
        })
    }

    /// Allan variances by mechanism `[laser, projection, dick]` and the modified Allan
    /// variance (fractional, squared) at `tau_s` (s, within (0, 1e9]; not checked here).
    pub fn variances(&self, tau_s: f64) -> ([f64; 3], f64) {
        let (p, m, _) = self.model.curve_point(tau_s);
        (p, m * m)
    }

    /// Allan deviation of the locked laser at `tau_s` (s), all mechanisms (fractional).
    pub fn sigma_at(&self, tau_s: f64) -> f64 {
        self.model.total(tau_s)
    }

    /// Projection-noise Allan deviation at 1 s, as [`Evaluation::projection`] gives it.
    pub fn projection_1s(&self) -> f64 {
        self.sigma_projection_1s
    }

    /// Dick-effect Allan deviation at 1 s, as [`Evaluation::dick`] gives it.
    pub fn dick_1s(&self) -> f64 {
        self.sigma_dick_1s
    }

    /// The white-frequency level extrapolated to 1 s, as [`Evaluation::sigma_1s_equivalent`].
    pub fn sigma_1s_equivalent(&self) -> f64 {
        sigma_1s_equivalent(self.sigma_projection_1s, self.sigma_dick_1s)
    }

    /// RMS phase excursion of the free laser over the probe, rad, as [`Evaluation::limits`] gives it.
    pub fn probe_phase_rms_rad(&self) -> f64 {
        self.probe_phase_rms_rad
    }

    /// Duration of one cycle, s.
    pub fn cycle_time_s(&self) -> f64 {
        self.cycle_s
    }
}

fn sigma_1s_equivalent(projection_1s: f64, dick_1s: f64) -> f64 {
    libm::sqrt(projection_1s * projection_1s + dick_1s * dick_1s)
}

/// Halvings of the bracket [1e-7 s, 1e5 s] in the search for the coherence limit.
const COHERENCE_BISECTIONS: usize = 40;

/// Laser coherence over a probe of `t` s: the phase of the free laser's frequency wander
/// between consecutive probes, 2 pi nu0 N T sqrt(2) sigma_y(T) (common practice).
fn phase_rms(model: &Model, nu0: f64, n_phase: f64, t: f64) -> f64 {
    2.0 * PI * nu0 * n_phase * t * libm::sqrt(2.0 * model.free_var(t, false))
}

/// Checks a list of averaging times: at most [`MAX_LOCKED_TAUS`], each finite, above 0 and
/// at most [`caps::MAX_TAU_S`]; errors name `tau_s[i]`.
pub fn check_taus(taus_s: &[f64]) -> Result<(), InputError> {
    if taus_s.len() > MAX_LOCKED_TAUS {
        return Err(InputError::single("tau_s", format!("{} averaging times", taus_s.len()), format!("at most {MAX_LOCKED_TAUS}")));
    }
    for (i, &t) in taus_s.iter().enumerate() {
        if !t.is_finite() || t <= 0.0 || t > caps::MAX_TAU_S {
            return Err(InputError::single(format!("tau_s[{i}]"), crate::error::show(t), format!("an averaging time must be a finite number above 0 and at most {:e} s", caps::MAX_TAU_S)));
        }
    }
    Ok(())
}

/// The locked laser of design `d` at each averaging time of `taus_s` (s): its Allan
/// variances by mechanism `[laser, projection, dick]` and its modified Allan variance (both
/// fractional, squared), from the same model and numbers as [`evaluate`].
pub fn locked_variances(d: &Design, taus_s: &[f64]) -> Result<Vec<([f64; 3], f64)>, InputError> {
    check_taus(taus_s)?;
    let m = LockedModel::new(d)?;
    Ok(taus_s.iter().map(|&tau| m.variances(tau)).collect())
}

/// Evaluates a design: validates it, then computes the whole budget.
///
/// ```
/// let d = &clockwright_core::demo::designs()[0];
/// let e = clockwright_core::evaluate(d, &Default::default()).unwrap();
/// assert!(e.sigma_1s_equivalent > 1e-17 && e.sigma_1s_equivalent < 1e-14);
/// ```
pub fn evaluate(d: &Design, opt: &EvalOptions) -> Result<Evaluation, InputError> {
    evaluate_with_cache(d, opt, &mut StageCache::default())
}

/// As [`evaluate`], reusing the costly stages kept in `cache` where their inputs are
/// unchanged; the result is the same as [`evaluate`]'s.
pub fn evaluate_with_cache(d: &Design, opt: &EvalOptions, cache: &mut StageCache) -> Result<Evaluation, InputError> {
    d.validate()?;
    let cycle = d.cycle_time_s();
    let probe_segments = d.sequence.segments.iter().filter(|s| !matches!(s, crate::design::Segment::Dead { .. })).count();
    let table_rows = d.laser.table.as_ref().map(|t| t.points.len()).unwrap_or(0);
    check_options(opt, cycle, probe_segments, table_rows)?;
    let nu0 = d.transition.frequency_hz;
    let Built { model, probe, ro, op, proj, gf, dick } = build_with(d, cache)?;
    let sigma_dick_1s = libm::sqrt(dick.variance_coefficient);
    // Every curve point holds the projection and Dick parts: when either is beyond double
    // precision the result cannot be finite, so it is refused before the curve is made.
    for (path, v) in [("result.projection.sigma_1s", proj.sigma_1s), ("result.dick.sigma_1s", sigma_dick_1s)] {
        if !v.is_finite() {
            return Err(crate::finite::out_of_range(path.into(), format!("{} (out of the double-precision range)", crate::error::show(v))));
        }
    }
    let attack_s = d.lock.attack_time_s;

    let taus = log_grid(cycle, opt.tau_max_s, opt.tau_points);
    let mut curve = Curve { tau_s: taus.clone(), total: vec![], laser: vec![], projection: vec![], dick: vec![], mod_total: vec![], free_laser: vec![] };
    for &tau in &taus {
        let (p, mod_total, free) = model.curve_point(tau);
        curve.laser.push(libm::sqrt(p[0]));
        curve.projection.push(libm::sqrt(p[1]));
        curve.dick.push(libm::sqrt(p[2]));
        curve.total.push(libm::sqrt(p.iter().sum()));
        curve.mod_total.push(mod_total);
        curve.free_laser.push(libm::sqrt(free));
    }
    let sigma_1s_equivalent = sigma_1s_equivalent(proj.sigma_1s, sigma_dick_1s);

    let checkpoints = CHECKPOINTS_S
        .iter()
        .map(|&tau| {
            let p = model.parts(tau);
            Checkpoint {
                tau_s: tau,
                total: libm::sqrt(p.iter().sum()),
                laser: libm::sqrt(p[0]),
                projection: libm::sqrt(p[1]),
                dick: libm::sqrt(p[2]),
                dominant: dominant(&p),
            }
        })
        .collect::<Vec<_>>();

    let target = time_to_target(&model, &curve, opt.target_instability, sigma_1s_equivalent);

    // Laser coherence over the probe (see `phase_rms`).
    let n_phase = probe.detuning_factor;
    let probe_s = probe.duration_s();
    let phase_rms = |t: f64| phase_rms(&model, nu0, n_phase, t);
    let probe_phase_rms_rad = phase_rms(probe_s);
    let coherence_probe_limit_s = {
        let (mut a, mut b) = (libm::log(1e-7), libm::log(1e5));
        if phase_rms(libm::exp(b)) < 1.0 {
            None
        } else if phase_rms(libm::exp(a)) > 1.0 {
            Some(libm::exp(a))
        } else {
            // 40 halvings of ln(1e12) leave the limit known to 3e-11 relative; each step
            // is one transfer-function integral when the laser has a table.
            for _ in 0..COHERENCE_BISECTIONS {
                let m = (a + b) / 2.0;
                if phase_rms(libm::exp(m)) < 1.0 { a = m } else { b = m }
            }
            Some(libm::exp((a + b) / 2.0))
        }
    };
    let probe_over_lifetime = d.transition.lifetime_s.map(|t| probe_s / t).unwrap_or(0.0);
    let servo_lag_fractional = d.laser.drift_per_s * attack_s;
    let mut notes = Vec::new();
    if probe_phase_rms_rad > 1.0 {
        notes.push(format!(
            "The laser's RMS phase excursion over the probe is {probe_phase_rms_rad:.2} rad (above 1 rad): fringe hops are likely and this linear budget is optimistic."
        ));
    }
    if probe_over_lifetime > 0.5 {
        notes.push(format!("The probe lasts {probe_over_lifetime:.2} excited-state lifetimes: decay lowers the contrast; longer probes gain little."));
    }
    let dead = cycle - probe_s;
    if dead / cycle > 0.5 {
        notes.push(format!("Dead time is {:.0}% of the cycle; the Dick effect grows with it.", 100.0 * dead / cycle));
    }
    if dick.truncation_bound_relative > crate::dick::TOLERANCE {
        notes.push(format!(
            "The Dick sum stopped at {} harmonics with a relative truncation bound of {:.1e}.",
            dick.harmonics_summed, dick.truncation_bound_relative
        ));
    }
    if servo_lag_fractional != 0.0 {
        notes.push(format!("The laser drift leaves a constant servo lag of {servo_lag_fractional:.2e} (fractional) behind the integrator."));
    }
    let dominant_1s = checkpoints[0].dominant;
    notes.push(format!(
        "At 1 s the budget is dominated by {}.",
        match dominant_1s {
            Mechanism::Laser => "laser noise the servo does not remove",
            Mechanism::Projection => "quantum projection noise",
            Mechanism::Dick => "the Dick effect",
        }
    ));

    // Plots: g(t) over the cycle and the line shape.
    let n = opt.plot_points;
    let gmax = gf.max_abs().max(1e-300);
    let t_s: Vec<f64> = (0..n).map(|k| cycle * k as f64 / (n - 1) as f64).collect();
    let g: Vec<f64> = t_s.iter().map(|&t| gf.at(t.min(cycle * (1.0 - 1e-12))) / gmax).collect();
    let span = 3.0 * op.edge_hz;
    let detuning_hz: Vec<f64> = (0..n).map(|k| -span + 2.0 * span * k as f64 / (n - 1) as f64).collect();
    // An even line is computed on its upper half and mirrored.
    let mut excitation = vec![0.0; n];
    for k in (0..n).rev() {
        let mirror = n - 1 - k;
        excitation[k] = if probe.line_is_even() && mirror > k { excitation[mirror] } else { probe.excitation(detuning_hz[k]) };
    }
    let measured = excitation.iter().map(|&p| ro.measured(p)).collect();

    let out = Evaluation {
        cycle_time_s: cycle,
        probe_time_s: probe_s,
        dead_time_s: dead,
        operating_point: OperatingPoint {
            detuning_hz: op.detuning_hz,
            excitation: op.excitation,
            measured_excitation: op.measured,
            slope_per_hz: op.slope,
            best_detuning_hz: op.best_hz,
            half_maximum_detuning_hz: op.half_max_hz,
            peak_excitation: op.peak,
        },
        projection: ProjectionResult {
            sigma_1s: proj.sigma_1s,
            effective_atoms: proj.effective_atoms,
            misread_ground_effective: ro.e_g,
            misread_excited_effective: ro.e_e,
            squeezing_factor: proj.squeezing_factor,
        },
        dick: DickResult {
            sigma_1s: sigma_dick_1s,
            harmonics_summed: dick.harmonics_summed,
            truncation_bound_relative: dick.truncation_bound_relative,
            weights: dick.weights,
            g0: dick.g0,
        },
        sigma_1s_equivalent,
        curve,
        target,
        limits: Limits { probe_phase_rms_rad, coherence_probe_limit_s, probe_over_lifetime, servo_lag_fractional, notes },
        sensitivity: SensitivitySamples { t_s, g },
        line_shape: LineShape { detuning_hz, excitation, measured },
        checkpoints,
    };
    crate::finite::require_finite(&out, "result")?;
    Ok(out)
}

fn time_to_target(model: &Model, curve: &Curve, target: f64, sigma_1s_eq: f64) -> TargetResult {
    let (time_s, note) = target_time(model, curve, target, sigma_1s_eq);
    // What limits the clock when it reaches the target: the model's own parts there.
    let dominant = time_s.map(|t| dominant(&model.parts(t)));
    TargetResult { target, time_s, note: note.into(), dominant }
}

/// The averaging time at which the locked laser reaches `target` and stays below, and how
/// it was found.
fn target_time(model: &Model, curve: &Curve, target: f64, sigma_1s_eq: f64) -> (Option<f64>, &'static str) {
    let last_above = curve.total.iter().rposition(|&s| s > target);
    match last_above {
        None => (Some(curve.tau_s[0]), "below the target from the first cycle on"),
        Some(i) if i + 1 == curve.tau_s.len() => {
            // Beyond the grid the locked laser averages as white frequency noise.
            let t = (sigma_1s_eq / target) * (sigma_1s_eq / target);
            if t.is_finite() && t > curve.tau_s[i] && model.total(t) <= target * (1.0 + 1e-3) {
                (Some(t), "extrapolated as white frequency noise beyond the last averaging time")
            } else {
                (None, "not reached within the modelled averaging times")
            }
        }
        Some(i) => {
            // Secant steps on log sigma against log tau between the grid points.
            let f = |lt: f64| libm::log(model.total(libm::exp(lt)) / target);
            let (mut a, mut b) = (libm::log(curve.tau_s[i]), libm::log(curve.tau_s[i + 1]));
            let (mut fa, mut fb) = (libm::log(curve.total[i] / target), libm::log(curve.total[i + 1] / target));
            for _ in 0..30 {
                let c = if fa != fb { (a * fb - b * fa) / (fb - fa) } else { (a + b) / 2.0 };
                let c = c.max(a.min(b)).min(a.max(b));
                let fc = f(c);
                if fc.abs() < 1e-12 {
                    b = c;
                    break;
                }
                if fc > 0.0 { a = c; fa = fc } else { b = c; fb = fc }
                if (b - a).abs() < 1e-10 {
                    break;
                }
            }
            (Some(libm::exp(b)), "found on the computed curve")
        }
    }
}
