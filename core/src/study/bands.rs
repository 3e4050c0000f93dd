//! Uncertainty bands: inputs given as ranges or distributions, propagated through the
//! whole evaluation by seeded sampling.
//!
//! Method (stated in every result): Latin hypercube sampling (Technometrics 21, 239
//! (1979)) by default, plain Monte Carlo on request. For n samples, each uncertain field's
//! probability range is cut into n equal strata; each stratum is used once, at a uniform
//! point inside it, and the strata of different fields are paired by independent seeded
//! permutations. The uniform numbers go through the inverse distribution function of each
//! field. Every sample design is evaluated in full; the bands are sample quantiles by
//! linear interpolation between order statistics (definition 7 of The American
//! Statistician 50, 361 (1996)), per averaging time on sigma_y(tau) and per scalar of the
//! evaluation table. A sample whose design is invalid is left out and listed with the
//! reason; a target not reached counts as an infinite time, so a quantile that falls there
//! is reported as `None` (not reached). A sample's curve starts at its own cycle time, so
//! when durations are uncertain the shortest averaging times of the band are taken over the
//! samples that reach them, and left empty where fewer than half of the valid samples do.

use super::caps::{MAX_QUANTILES, MAX_SAMPLES, MAX_UNCERTAIN};
use super::path::{with_values, FieldPath, NumberKind};
use super::sweep::{Hole, Progress};
use super::SplitMix64;
use crate::budget::{evaluate_with_cache, StageCache};
use crate::design::Design;
use crate::error::{show, Checker, InputError};
use crate::result::{EvalOptions, Evaluation};
use serde::{Deserialize, Serialize};
use serde_json::Value;
use std::f64::consts::PI;

/// How one uncertain field is spread.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "snake_case", deny_unknown_fields)]
pub enum Distribution {
    /// A range: uniform from `low` to `high`.
    Uniform { low: f64, high: f64 },
    /// A range over decades: ln x uniform from ln `low` to ln `high` (both positive).
    LogUniform { low: f64, high: f64 },
    /// Normal with `mean` and standard deviation `sd`.
    Normal { mean: f64, sd: f64 },
    /// Log-normal: ln x normal with mean ln `median` and standard deviation `sigma_ln`.
    LogNormal { median: f64, sigma_ln: f64 },
}

impl Distribution {
    fn check(&self, at: &str, c: &mut Checker) {
        let big = 1e300;
        match *self {
            Distribution::Uniform { low, high } => {
                if c.range(&format!("{at}.low"), low, -big, big, "") && c.range(&format!("{at}.high"), high, -big, big, "") && high < low {
                    c.push(format!("{at}.high"), show(high), format!("must be at least low ({})", show(low)));
                }
            }
            Distribution::LogUniform { low, high } => {
                if c.above(&format!("{at}.low"), low, 0.0, big, "") && c.above(&format!("{at}.high"), high, 0.0, big, "") && high < low {
                    c.push(format!("{at}.high"), show(high), format!("must be at least low ({})", show(low)));
                }
            }
            Distribution::Normal { mean, sd } => {
                c.range(&format!("{at}.mean"), mean, -big, big, "");
                c.range(&format!("{at}.sd"), sd, 0.0, big, "");
            }
            Distribution::LogNormal { median, sigma_ln } => {
                c.above(&format!("{at}.median"), median, 0.0, big, "");
                c.range(&format!("{at}.sigma_ln"), sigma_ln, 0.0, 10.0, "");
            }
        }
    }

    /// The value below which a share `u` (0 < u < 1) of the distribution lies.
    pub fn quantile(&self, u: f64) -> f64 {
        match *self {
            Distribution::Uniform { low, high } => low + (high - low) * u,
            Distribution::LogUniform { low, high } => libm::exp(libm::log(low) + (libm::log(high) - libm::log(low)) * u),
            Distribution::Normal { mean, sd } => mean + sd * normal_quantile(u),
            Distribution::LogNormal { median, sigma_ln } => median * libm::exp(sigma_ln * normal_quantile(u)),
        }
    }
}

/// The standard normal distribution function, Phi(x) = erfc(-x / sqrt 2) / 2.
pub fn normal_cdf(x: f64) -> f64 {
    0.5 * libm::erfc(-x / core::f64::consts::SQRT_2)
}

/// The standard normal quantile Phi^-1(p) for 0 < p < 1 (infinite at 0 and 1, NaN
/// outside): the rational start of Applied Mathematics Series 55 (1964), eq. 26.2.23
/// (error below 4.5e-4), refined by third-order root-finding steps on [`normal_cdf`] to
/// full precision.
pub fn normal_quantile(p: f64) -> f64 {
    if !(p > 0.0 && p < 1.0) {
        return if p == 0.0 { f64::NEG_INFINITY } else if p == 1.0 { f64::INFINITY } else { f64::NAN };
    }
    let q = p.min(1.0 - p);
    let t = libm::sqrt(-2.0 * libm::log(q));
    let mut x = t - (2.515517 + 0.802853 * t + 0.010328 * t * t) / (1.0 + 1.432788 * t + 0.189269 * t * t + 0.001308 * t * t * t);
    if p < 0.5 {
        x = -x;
    }
    for _ in 0..4 {
        // A third-order step on Phi(x) - p, x -= u / (1 + x u / 2) with u = (Phi(x) - p) / phi(x);
        // the error is taken on the smaller tail for accuracy.
        let e = if x < 0.0 { normal_cdf(x) - p } else { (1.0 - p) - normal_cdf(-x) };
        let pdf = libm::exp(-x * x / 2.0) / libm::sqrt(2.0 * PI);
        if !(pdf > 0.0) {
            break;
        }
        let u = e / pdf;
        x -= u / (1.0 + x * u / 2.0);
    }
    x
}

/// Sample quantile by linear interpolation between order statistics (definition 7 of The
/// American Statistician 50, 361 (1996)); `sorted` ascending, may end in infinities.
/// `None` when the quantile is not finite or there are no values.
pub fn quantile_sorted(sorted: &[f64], q: f64) -> Option<f64> {
    let n = sorted.len();
    if n == 0 {
        return None;
    }
    let h = (n - 1) as f64 * q;
    let lo = libm::floor(h) as usize;
    let frac = h - lo as f64;
    let v = if frac == 0.0 || lo + 1 >= n { sorted[lo.min(n - 1)] } else { sorted[lo] + frac * (sorted[lo + 1] - sorted[lo]) };
    if v.is_finite() { Some(v) } else { None }
}

/// One uncertain field.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Uncertain {
    /// Field path, as validation errors name fields.
    pub path: String,
    pub distribution: Distribution,
}

/// How the samples are drawn.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, Default)]
#[serde(rename_all = "snake_case")]
pub enum Sampling {
    #[default]
    LatinHypercube,
    MonteCarlo,
}

/// An uncertainty study of one design.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct BandRequest {
    /// The uncertain fields, 1 to [`MAX_UNCERTAIN`].
    pub uncertain: Vec<Uncertain>,
    /// Samples, 2 to [`MAX_SAMPLES`] (default 200).
    #[serde(default = "default_samples")]
    pub samples: usize,
    /// Seed of the generator (default 1).
    #[serde(default = "default_seed")]
    pub seed: u64,
    #[serde(default)]
    pub sampling: Sampling,
    /// Quantiles of the bands, each from 0 to 1 (default 0.16, 0.5, 0.84).
    #[serde(default = "default_quantiles")]
    pub quantiles: Vec<f64>,
    /// Evaluation options of every sample (target, averaging times; plots are not needed).
    #[serde(default = "default_options")]
    pub options: EvalOptions,
}

fn default_samples() -> usize {
    200
}
fn default_seed() -> u64 {
    1
}
fn default_quantiles() -> Vec<f64> {
    vec![0.16, 0.5, 0.84]
}
fn default_options() -> EvalOptions {
    EvalOptions { tau_points: 41, plot_points: 16, ..EvalOptions::default() }
}

impl BandRequest {
    /// A request with the defaults for `uncertain`.
    pub fn new(uncertain: Vec<Uncertain>) -> BandRequest {
        BandRequest { uncertain, samples: default_samples(), seed: default_seed(), sampling: Sampling::default(), quantiles: default_quantiles(), options: default_options() }
    }
}

/// The band of one scalar of the evaluation table.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ScalarBand {
    /// Name, as the evaluation names it (`sigma_1s_equivalent`, `time_to_target_s`, ...).
    pub name: String,
    /// The value of the nominal design.
    pub nominal: Option<f64>,
    /// One value per requested quantile; `None` where it is not finite (target not reached).
    pub values: Vec<Option<f64>>,
    /// Samples without a finite value (target not reached), counted as infinite.
    pub not_finite: usize,
}

/// Bands on the curve and the table.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct BandResult {
    /// The method in a sentence, with its references.
    pub method: String,
    pub sampling: Sampling,
    pub samples: usize,
    pub seed: u64,
    pub quantiles: Vec<f64>,
    /// Averaging times of the bands (the nominal design's grid), s.
    pub tau_s: Vec<f64>,
    /// sigma_y(tau) of the nominal design.
    pub nominal_curve: Vec<f64>,
    /// `curve[k][i]`: quantile k of sigma_y at tau_s[i]; `None` where too few samples reach that tau.
    pub curve: Vec<Vec<Option<f64>>>,
    /// Samples with a value at each averaging time (a sample's curve starts at its own cycle time).
    pub curve_samples: Vec<usize>,
    pub scalars: Vec<ScalarBand>,
    /// Samples left out, with the reason.
    pub failed: Vec<Hole>,
}

/// Names of the scalars with a band, in order.
pub const SCALARS: [&str; 10] = [
    "sigma_1s_equivalent",
    "projection_1s",
    "dick_1s",
    "dick_share",
    "time_to_target_s",
    "sigma_at_1s",
    "sigma_at_1000s",
    "sigma_at_86400s",
    "probe_phase_rms_rad",
    "cycle_time_s",
];

fn scalars(e: &Evaluation) -> [f64; 10] {
    let cp = |i: usize| e.checkpoints.get(i).map(|c| c.total).unwrap_or(f64::INFINITY);
    let (p, d) = (e.projection.sigma_1s, e.dick.sigma_1s);
    let share = if p * p + d * d > 0.0 { d * d / (p * p + d * d) } else { 0.0 };
    [
        e.sigma_1s_equivalent,
        p,
        d,
        share,
        e.target.time_s.unwrap_or(f64::INFINITY),
        cp(0),
        cp(1),
        cp(2),
        e.limits.probe_phase_rms_rad,
        e.cycle_time_s,
    ]
}

/// sigma_y of a sample's curve at `tau`, interpolated in log-log; `None` below its first
/// averaging time (one cycle).
fn curve_at(tau_s: &[f64], total: &[f64], tau: f64) -> Option<f64> {
    let n = tau_s.len();
    if n == 0 || tau < tau_s[0] * (1.0 - 1e-12) {
        return None;
    }
    if tau >= tau_s[n - 1] {
        return Some(total[n - 1]);
    }
    let k = tau_s.partition_point(|&t| t <= tau).clamp(1, n - 1);
    let (t0, t1, s0, s1) = (tau_s[k - 1], tau_s[k], total[k - 1], total[k]);
    if tau == t0 {
        return Some(s0);
    }
    let w = (libm::log(tau) - libm::log(t0)) / (libm::log(t1) - libm::log(t0));
    Some(libm::exp(libm::log(s0) + w * (libm::log(s1) - libm::log(s0))))
}

/// An uncertainty study in progress: evaluate it chunk by chunk with [`BandRun::advance`].
pub struct BandRun {
    base: Value,
    paths: Vec<(FieldPath, NumberKind)>,
    req: BandRequest,
    /// `inputs[i][j]`: value of field j in sample i.
    inputs: Vec<Vec<f64>>,
    nominal: Evaluation,
    next: usize,
    curves: Vec<Vec<Option<f64>>>,
    scalar_values: Vec<[f64; 10]>,
    failed: Vec<Hole>,
    /// Costly stages reused between samples whose fields leave them unchanged (an
    /// uncertain laser floor keeps the operating point, an uncertain atom count all of them).
    stages: StageCache,
}

impl BandRun {
    /// Checks the request, draws every sample's inputs and evaluates the nominal design.
    pub fn new(design: &Design, req: &BandRequest) -> Result<BandRun, InputError> {
        let mut c = Checker::new();
        if req.uncertain.is_empty() || req.uncertain.len() > MAX_UNCERTAIN {
            c.push("uncertain", format!("{} fields", req.uncertain.len()), format!("give 1 to {MAX_UNCERTAIN} uncertain fields"));
        }
        if req.samples < 2 || req.samples > MAX_SAMPLES {
            c.push("samples", req.samples.to_string(), format!("must be a whole number from 2 to {MAX_SAMPLES}"));
        }
        if req.quantiles.is_empty() || req.quantiles.len() > MAX_QUANTILES {
            c.push("quantiles", format!("{} quantiles", req.quantiles.len()), format!("give 1 to {MAX_QUANTILES} quantiles"));
        }
        for (i, &q) in req.quantiles.iter().enumerate() {
            c.range(&format!("quantiles[{i}]"), q, 0.0, 1.0, "");
        }
        for (j, u) in req.uncertain.iter().enumerate() {
            u.distribution.check(&format!("uncertain[{j}].distribution"), &mut c);
        }
        c.finish()?;
        let base = serde_json::to_value(design).unwrap_or(Value::Null);
        let mut paths: Vec<(FieldPath, NumberKind)> = Vec::new();
        for (j, u) in req.uncertain.iter().enumerate() {
            let at = format!("uncertain[{j}].path");
            let p = FieldPath::parse(&u.path, &at)?;
            if paths.iter().any(|(q, _)| q.text == p.text) {
                return Err(InputError::single(at, format!("\"{}\"", p.text), "each field may be uncertain once"));
            }
            let (_, kind) = p.read(&base, &at, "the design")?;
            paths.push((p, kind));
        }
        let nominal = crate::evaluate(design, &req.options)?;
        let (n, m) = (req.samples, req.uncertain.len());
        let mut rng = SplitMix64(req.seed);
        let mut u = vec![vec![0.0; m]; n];
        for j in 0..m {
            match req.sampling {
                Sampling::LatinHypercube => {
                    let mut perm: Vec<usize> = (0..n).collect();
                    for i in (1..n).rev() {
                        perm.swap(i, rng.below(i + 1));
                    }
                    for i in 0..n {
                        u[i][j] = (perm[i] as f64 + rng.open01()) / n as f64;
                    }
                }
                Sampling::MonteCarlo => {
                    for row in u.iter_mut() {
                        row[j] = rng.open01();
                    }
                }
            }
        }
        let inputs = u.iter().map(|row| row.iter().zip(&req.uncertain).map(|(&x, f)| f.distribution.quantile(x.clamp(1e-300, 1.0 - 1e-16))).collect()).collect();
        Ok(BandRun { base, paths, req: req.clone(), inputs, nominal, next: 0, curves: Vec::new(), scalar_values: Vec::new(), failed: Vec::new(), stages: StageCache::default() })
    }

    /// The drawn inputs: `inputs()[i][j]` is field j of sample i (before whole-number rounding).
    pub fn inputs(&self) -> &[Vec<f64>] {
        &self.inputs
    }

    pub fn total(&self) -> usize {
        self.req.samples
    }

    pub fn is_finished(&self) -> bool {
        self.next >= self.total()
    }

    /// Evaluates up to `max_samples` more samples (at least one while any is left).
    pub fn advance(&mut self, max_samples: usize) -> Progress {
        let end = (self.next + max_samples.max(1)).min(self.total());
        while self.next < end {
            let i = self.next;
            let changes: Vec<(&FieldPath, NumberKind, f64)> = self.paths.iter().zip(&self.inputs[i]).map(|((p, k), &x)| (p, *k, x)).collect();
            let r = with_values(&mut self.base, &changes).and_then(|d| evaluate_with_cache(&d, &self.req.options, &mut self.stages).map_err(|e| e.to_string()));
            match r {
                Ok(e) => {
                    self.curves.push(self.nominal.curve.tau_s.iter().map(|&t| curve_at(&e.curve.tau_s, &e.curve.total, t)).collect());
                    self.scalar_values.push(scalars(&e));
                }
                Err(reason) => self.failed.push(Hole { index: i, reason }),
            }
            self.next += 1;
        }
        Progress { done: self.next, total: self.total(), finished: self.is_finished() }
    }

    /// The bands; an error while samples are left, or when no sample gave a valid design.
    pub fn result(&self) -> Result<BandResult, InputError> {
        if !self.is_finished() {
            return Err(InputError::single("run", format!("{} of {} samples done", self.next, self.total()), "the result is ready once every sample is evaluated"));
        }
        if self.scalar_values.is_empty() {
            let why = self.failed.first().map(|h| h.reason.clone()).unwrap_or_default();
            return Err(InputError::single("uncertain", format!("{} samples", self.total()), format!("no sample gave a valid design; the first: {why}")));
        }
        let qs = &self.req.quantiles;
        let taus = &self.nominal.curve.tau_s;
        let mut curve = vec![Vec::with_capacity(taus.len()); qs.len()];
        let mut curve_samples = Vec::with_capacity(taus.len());
        for i in 0..taus.len() {
            let mut v: Vec<f64> = self.curves.iter().filter_map(|c| c[i]).collect();
            v.sort_by(|a, b| a.total_cmp(b));
            curve_samples.push(v.len());
            for (k, &q) in qs.iter().enumerate() {
                // A band needs at least half of the valid samples at that averaging time.
                curve[k].push(if 2 * v.len() >= self.curves.len() { quantile_sorted(&v, q) } else { None });
            }
        }
        let nominal = scalars(&self.nominal);
        let scalars = SCALARS
            .iter()
            .enumerate()
            .map(|(j, name)| {
                let mut v: Vec<f64> = self.scalar_values.iter().map(|s| s[j]).collect();
                v.sort_by(|a, b| a.total_cmp(b));
                ScalarBand {
                    name: name.to_string(),
                    nominal: if nominal[j].is_finite() { Some(nominal[j]) } else { None },
                    values: qs.iter().map(|&q| quantile_sorted(&v, q)).collect(),
                    not_finite: v.iter().filter(|x| !x.is_finite()).count(),
                }
            })
            .collect();
        let how = match self.req.sampling {
            Sampling::LatinHypercube => "Latin hypercube sampling (Technometrics 21, 239 (1979))",
            Sampling::MonteCarlo => "plain Monte Carlo sampling",
        };
        let method = format!(
            "{how} of {} samples with seed {}, each design evaluated in full; bands are sample quantiles by linear interpolation between order statistics (The American Statistician 50, 361 (1996), definition 7); {} invalid samples left out.",
            self.total(),
            self.req.seed,
            self.failed.len()
        );
        Ok(BandResult {
            method,
            sampling: self.req.sampling,
            samples: self.total(),
            seed: self.req.seed,
            quantiles: qs.clone(),
            tau_s: taus.clone(),
            nominal_curve: self.nominal.curve.total.clone(),
            curve,
            curve_samples,
            scalars,
            failed: self.failed.clone(),
        })
    }
}

/// Bands on sigma_y(tau) and on every scalar of the table, in one call.
pub fn bands(design: &Design, req: &BandRequest) -> Result<BandResult, InputError> {
    let mut run = BandRun::new(design, req)?;
    while !run.is_finished() {
        run.advance(usize::MAX);
    }
    run.result()
}
