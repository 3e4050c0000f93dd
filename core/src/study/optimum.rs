//! The probe time (and optionally the number of detection rounds) that minimises the Allan
//! deviation of the locked laser at a chosen averaging time, and the mechanism that sets it.
//!
//! The probe time depends on the sequence's shape ([`ProbeShape`]):
//! - Ramsey-type sequences (a free segment between pulses): the free-evolution time, the sum
//!   of the free segments, scaled together; the pulses keep their durations and areas.
//! - Rabi-type sequences (pulses only): the pulse time, the sum of the pulse durations,
//!   scaled together at fixed pulse area (the Rabi frequency follows).
//!
//! Dead time (cooling, preparation, one detection round) stays fixed; the servo's attack
//! time stays fixed unless `attack_cycles` keeps it at a number of cycles.
//!
//! Search: on ln(probe time) over the range of [`OptimumRequest`], clipped where the design
//! would become invalid (servo attack time shorter than a cycle, a segment above the cap)
//! or meaningless (a cycle not shorter than tau), and by default at the laser-coherence
//! limit (RMS phase of the free laser over the probe reaching 1 rad, beyond which the
//! linear budget is optimistic). A log-spaced scan of 8 points per decade (9 to 65
//! points) finds the best grid point; golden-section search on ln T between its two
//! neighbours refines it to 1e-7 in ln T. The number of detection rounds is chosen by a
//! scan over every whole number from 1 to `max_rounds`.

use super::Output;
use crate::design::{caps as dcaps, DeadLabel, Design, Segment};
use crate::error::{show, Checker, InputError};
use crate::result::Evaluation;
use serde::{Deserialize, Serialize};

/// Points per decade of the coarse scan.
pub const SCAN_PER_DECADE: f64 = 8.0;
/// Fewest and most points of the coarse scan.
pub const SCAN_MIN_POINTS: usize = 9;
pub const SCAN_MAX_POINTS: usize = 65;
/// Golden-section steps at most (the bracket shrinks below 1e-7 in ln T well before).
pub const MAX_GOLDEN_STEPS: usize = 80;
/// Width in ln T at which the golden-section search stops.
pub const LN_TOLERANCE: f64 = 1e-7;

/// What to optimise.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct OptimumRequest {
    /// Averaging time at which sigma_y of the locked laser is minimised, s.
    pub tau_s: f64,
    /// Shortest probe time searched, s (default 1e-3 s).
    #[serde(default = "default_min")]
    pub probe_min_s: f64,
    /// Longest probe time searched, s (default 1e3 s), before the clipping described above.
    #[serde(default = "default_max")]
    pub probe_max_s: f64,
    /// Stop at the laser-coherence limit of the probe time (default true).
    #[serde(default = "yes")]
    pub respect_coherence: bool,
    /// Keep the servo attack time at this many cycles (1 to 1e6); absent: the attack time stays fixed.
    #[serde(default)]
    pub attack_cycles: Option<f64>,
    /// Also choose the detection rounds from 1 to this (at most 99); absent: keep the design's.
    #[serde(default)]
    pub max_rounds: Option<u32>,
}

fn default_min() -> f64 {
    1e-3
}
fn default_max() -> f64 {
    1e3
}
fn yes() -> bool {
    true
}

impl OptimumRequest {
    /// A request at `tau_s` with every other setting at its default.
    pub fn at(tau_s: f64) -> OptimumRequest {
        OptimumRequest { tau_s, probe_min_s: default_min(), probe_max_s: default_max(), respect_coherence: true, attack_cycles: None, max_rounds: None }
    }

    fn check(&self) -> Result<(), InputError> {
        let mut c = Checker::new();
        c.above("tau_s", self.tau_s, 0.0, crate::budget::caps::MAX_TAU_S, "s");
        c.range("probe_min_s", self.probe_min_s, dcaps::MIN_DURATION_S, dcaps::MAX_DURATION_S, "s");
        if c.range("probe_max_s", self.probe_max_s, dcaps::MIN_DURATION_S, dcaps::MAX_DURATION_S, "s") && self.probe_max_s <= self.probe_min_s {
            c.push("probe_max_s", format!("{} s", show(self.probe_max_s)), format!("must exceed probe_min_s ({} s)", show(self.probe_min_s)));
        }
        if let Some(k) = self.attack_cycles {
            c.range("attack_cycles", k, 1.0, 1e6, "cycles");
        }
        if let Some(r) = self.max_rounds {
            if r == 0 || r > dcaps::MAX_ROUNDS {
                c.push("max_rounds", r.to_string(), format!("must be a whole number from 1 to {}", dcaps::MAX_ROUNDS));
            }
        }
        c.finish()
    }
}

/// Which time of the sequence is the probe time.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum ProbeShape {
    /// Free-evolution time of a Ramsey-type sequence (sum of its free segments).
    RamseyFreeTime,
    /// Pulse time of a Rabi-type sequence (sum of its pulses, at fixed pulse areas).
    RabiPulseTime,
}

/// What set the end of the searched range.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum RangeEnd {
    /// The requested `probe_max_s`.
    Requested,
    /// A cycle may not outlast the servo's attack time (or 1e7 s of it).
    ServoAttackTime,
    /// A cycle must be shorter than the averaging time.
    AveragingTime,
    /// The free laser's RMS phase over the probe reaches 1 rad.
    LaserCoherence,
    /// A segment would exceed the longest allowed duration.
    SegmentCap,
    /// The laser's high cut-off times the cycle would exceed its cap.
    CutoffCap,
}

impl RangeEnd {
    /// What set the end, as words for a sentence.
    pub fn describe(self) -> &'static str {
        match self {
            RangeEnd::Requested => "the end of the requested range",
            RangeEnd::ServoAttackTime => "the servo attack time (a cycle may not outlast it)",
            RangeEnd::AveragingTime => "the averaging time (a cycle must be shorter)",
            RangeEnd::LaserCoherence => "the laser-coherence limit (1 rad RMS phase over the probe)",
            RangeEnd::SegmentCap => "the longest allowed segment",
            RangeEnd::CutoffCap => "the cap on the laser cut-off times the cycle",
        }
    }
}

/// The mechanism that sets the optimum.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum OptimumMechanism {
    /// Projection noise still falls with longer probes (as 1/T at fixed cycle share); the
    /// optimum is the longest probe the range allows.
    ProjectionNoise,
    /// The Dick effect, aliased through the dead time, still falls with longer probes (a
    /// larger duty cycle); the optimum is the longest probe the range allows.
    DeadTime,
    /// The probe time is capped where the free laser's RMS phase over the probe reaches 1 rad.
    LaserCoherence,
    /// Decay of the excited state: projection noise rises again past the optimum.
    Lifetime,
    /// The Dick effect rises with longer probes past the optimum.
    DickEffect,
    /// The laser noise the servo leaves rises with longer cycles past the optimum.
    LaserNoise,
}

/// The best probe time found for one number of detection rounds.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RoundsBest {
    pub rounds: u32,
    pub probe_time_s: f64,
    /// sigma_y at tau, fractional.
    pub sigma: f64,
}

/// One point of the coarse scan.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ScanPoint {
    pub probe_time_s: f64,
    /// sigma_y at tau; `None` where the design has no value there.
    pub sigma: Option<f64>,
}

/// The optimum and what sets it.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Optimum {
    /// Averaging time of the optimisation, s.
    pub tau_s: f64,
    pub probe_shape: ProbeShape,
    /// The probe time before optimising, s.
    pub start_probe_time_s: f64,
    /// The best probe time, s.
    pub probe_time_s: f64,
    /// Detection rounds at the optimum.
    pub rounds: u32,
    /// sigma_y of the locked laser at tau there, fractional.
    pub sigma: f64,
    /// Its parts at tau: laser noise the servo leaves, projection noise, Dick effect.
    pub laser: f64,
    pub projection: f64,
    pub dick: f64,
    /// The searched range of probe times (for the chosen rounds), s.
    pub range_s: [f64; 2],
    /// What set the long end of the range.
    pub range_end: RangeEnd,
    /// Whether the optimum sits at the long end of the range.
    pub at_range_end: bool,
    pub mechanism: OptimumMechanism,
    /// The finding in a sentence.
    pub explanation: String,
    pub cycle_time_s: f64,
    pub probe_over_lifetime: f64,
    pub probe_phase_rms_rad: f64,
    pub coherence_probe_limit_s: Option<f64>,
    /// Best probe time for each number of rounds tried.
    pub per_rounds: Vec<RoundsBest>,
    /// The coarse scan for the chosen rounds.
    pub scan: Vec<ScanPoint>,
    /// Evaluations made.
    pub evaluations: usize,
    /// The design at the optimum.
    pub design: Design,
}

/// How a design's probe time is read and changed.
#[derive(Debug, Clone, PartialEq)]
pub struct ProbeScaling {
    pub shape: ProbeShape,
    /// Indices of the scaled segments.
    pub segments: Vec<usize>,
    /// Their summed duration in the design, s.
    pub probe_time_s: f64,
    /// The rest of the probe (pulses of a Ramsey-type sequence), s.
    pub other_probe_s: f64,
}

impl ProbeScaling {
    /// The probe time of a design (which must hold at least one pulse).
    pub fn of(d: &Design) -> ProbeScaling {
        let segs = &d.sequence.segments;
        let first = segs.iter().position(|s| matches!(s, Segment::Pulse { .. })).unwrap_or(0);
        let last = segs.iter().rposition(|s| matches!(s, Segment::Pulse { .. })).unwrap_or(0);
        let free: Vec<usize> = (first..=last.max(first)).filter(|&i| matches!(segs.get(i), Some(Segment::Free { .. }))).collect();
        let (shape, segments) = if free.is_empty() {
            (ProbeShape::RabiPulseTime, (first..=last.max(first)).filter(|&i| matches!(segs.get(i), Some(Segment::Pulse { .. }))).collect())
        } else {
            (ProbeShape::RamseyFreeTime, free)
        };
        let probe_time_s: f64 = segments.iter().map(|&i| segs[i].duration_s()).sum();
        let whole: f64 = segs.get(first..=last.max(first)).map(|s| s.iter().map(|s| s.duration_s()).sum()).unwrap_or(0.0);
        ProbeScaling { shape, segments, probe_time_s, other_probe_s: (whole - probe_time_s).max(0.0) }
    }

    /// The design with probe time `t` s, `rounds` detection rounds, and the attack time at
    /// `attack_cycles` cycles when given.
    pub fn apply(&self, d: &Design, t: f64, rounds: u32, attack_cycles: Option<f64>) -> Design {
        let mut out = d.clone();
        let k = t / self.probe_time_s;
        for &i in &self.segments {
            match &mut out.sequence.segments[i] {
                Segment::Pulse { duration_s, .. } | Segment::Free { duration_s } | Segment::Dead { duration_s, .. } => *duration_s *= k,
            }
        }
        out.detection.rounds = rounds;
        if let Some(n) = attack_cycles {
            out.lock.attack_time_s = n * out.cycle_time_s();
        }
        out
    }

    fn durations(&self, d: &Design) -> (f64, f64) {
        let ds = self.segments.iter().map(|&i| d.sequence.segments[i].duration_s());
        ds.fold((f64::INFINITY, 0.0f64), |(a, b), x| (a.min(x), b.max(x)))
    }
}

/// Cycle time minus the probe time, with `rounds` detection rounds, s.
fn fixed_part(d: &Design, s: &ProbeScaling, rounds: u32) -> f64 {
    let det: f64 = d.sequence.segments.iter().filter_map(|x| if let Segment::Dead { label: DeadLabel::Detection, duration_s } = x { Some(*duration_s) } else { None }).sum();
    let base: f64 = d.sequence.segments.iter().map(|x| x.duration_s()).sum();
    base - s.probe_time_s + det * (rounds as f64 - 1.0)
}

struct Search<'a> {
    d: &'a Design,
    s: &'a ProbeScaling,
    req: &'a OptimumRequest,
    output: Output,
    evaluations: usize,
}

impl Search<'_> {
    fn eval(&mut self, t: f64, rounds: u32) -> Result<Evaluation, String> {
        self.evaluations += 1;
        let d = self.s.apply(self.d, t, rounds, self.req.attack_cycles);
        let cycle = d.cycle_time_s();
        if cycle >= self.req.tau_s {
            return Err(format!("a cycle of {} s is not shorter than tau", show(cycle)));
        }
        crate::evaluate(&d, &self.output.options()).map_err(|e| e.to_string())
    }

    fn sigma(&mut self, t: f64, rounds: u32) -> f64 {
        match self.eval(t, rounds) {
            Ok(e) => self.output.read(&e).unwrap_or(f64::INFINITY),
            Err(_) => f64::INFINITY,
        }
    }

    /// The searched range for `rounds`, and what set its long end.
    fn range(&self, rounds: u32, coherence: Option<f64>) -> ([f64; 2], RangeEnd) {
        let (d, s, req) = (self.d, self.s, self.req);
        let fixed = fixed_part(d, s, rounds);
        let (dmin, dmax) = s.durations(d);
        let shrink = 1.0 - 1e-9;
        let lo = req.probe_min_s.max(s.probe_time_s * dcaps::MIN_DURATION_S / dmin * (1.0 + 1e-9)).max((dcaps::MIN_CYCLE_S - fixed) * (1.0 + 1e-9));
        let mut ends = vec![(req.probe_max_s, RangeEnd::Requested), (s.probe_time_s * dcaps::MAX_DURATION_S / dmax * shrink, RangeEnd::SegmentCap), ((req.tau_s - fixed) * shrink, RangeEnd::AveragingTime)];
        ends.push((dcaps::MAX_CUTOFF_TIMES_CYCLE / d.laser.high_cutoff_hz * shrink - fixed, RangeEnd::CutoffCap));
        match req.attack_cycles {
            Some(k) => ends.push((1e7 / k * shrink - fixed, RangeEnd::ServoAttackTime)),
            None => ends.push((d.lock.attack_time_s * shrink - fixed, RangeEnd::ServoAttackTime)),
        }
        if let (true, Some(c)) = (req.respect_coherence, coherence) {
            ends.push((c - s.other_probe_s, RangeEnd::LaserCoherence));
        }
        let mut best = ends[0];
        for e in ends {
            if e.0 < best.0 {
                best = e;
            }
        }
        ([lo, best.0], best.1)
    }

    /// Scan and golden-section refinement for one number of rounds: (best T, sigma, scan).
    fn run(&mut self, rounds: u32, range: [f64; 2]) -> (f64, f64, Vec<ScanPoint>) {
        let [lo, hi] = range;
        let (la, lb) = (libm::log(lo), libm::log(hi));
        let decades = (lb - la) / core::f64::consts::LN_10;
        let n = ((libm::ceil(SCAN_PER_DECADE * decades) as usize) + 1).clamp(SCAN_MIN_POINTS, SCAN_MAX_POINTS);
        let ts: Vec<f64> = (0..n).map(|k| if k + 1 == n { hi } else if k == 0 { lo } else { libm::exp(la + (lb - la) * k as f64 / (n - 1) as f64) }).collect();
        let vs: Vec<f64> = ts.iter().map(|&t| self.sigma(t, rounds)).collect();
        let scan = ts.iter().zip(&vs).map(|(&t, &v)| ScanPoint { probe_time_s: t, sigma: if v.is_finite() { Some(v) } else { None } }).collect();
        let mut k = 0;
        for i in 1..n {
            if vs[i] < vs[k] {
                k = i;
            }
        }
        let (mut best_t, mut best_v) = (ts[k], vs[k]);
        if !best_v.is_finite() {
            return (best_t, best_v, scan);
        }
        let (mut a, mut b) = (libm::log(ts[k.saturating_sub(1)]), libm::log(ts[(k + 1).min(n - 1)]));
        let g = (libm::sqrt(5.0) - 1.0) / 2.0;
        let mut c = b - g * (b - a);
        let mut e = a + g * (b - a);
        let mut fc = self.sigma(libm::exp(c), rounds);
        let mut fe = self.sigma(libm::exp(e), rounds);
        for (t, v) in [(c, fc), (e, fe)] {
            if v < best_v {
                best_t = libm::exp(t);
                best_v = v;
            }
        }
        for _ in 0..MAX_GOLDEN_STEPS {
            if b - a < LN_TOLERANCE {
                break;
            }
            if fc <= fe {
                b = e;
                e = c;
                fe = fc;
                c = b - g * (b - a);
                fc = self.sigma(libm::exp(c), rounds);
                if fc < best_v {
                    best_t = libm::exp(c);
                    best_v = fc;
                }
            } else {
                a = c;
                c = e;
                fc = fe;
                e = a + g * (b - a);
                fe = self.sigma(libm::exp(e), rounds);
                if fe < best_v {
                    best_t = libm::exp(e);
                    best_v = fe;
                }
            }
        }
        (best_t.max(lo).min(hi), best_v, scan)
    }
}

/// Variances of the three parts at the last averaging time of an evaluation.
fn parts(e: &Evaluation) -> [f64; 3] {
    let last = |v: &Vec<f64>| v.last().map(|x| x * x).unwrap_or(0.0);
    [last(&e.curve.laser), last(&e.curve.projection), last(&e.curve.dick)]
}

fn argmax(x: [f64; 3]) -> usize {
    let mut k = 0;
    for i in 1..3 {
        if x[i] > x[k] {
            k = i;
        }
    }
    k
}

/// Finds the probe time (and the detection rounds, when asked) that minimises sigma_y of the
/// locked laser at `req.tau_s`, and the mechanism that sets it.
pub fn optimum(design: &Design, req: &OptimumRequest) -> Result<Optimum, InputError> {
    req.check()?;
    design.validate()?;
    let scaling = ProbeScaling::of(design);
    if !(scaling.probe_time_s > 0.0) {
        return Err(InputError::single("sequence.segments", "no probe time", "the sequence needs a pulse or a free segment to scale"));
    }
    let output = Output::SigmaAt { tau_s: req.tau_s };
    // The coherence limit depends on the laser and the transition only.
    let nominal = crate::evaluate(design, &crate::EvalOptions { tau_points: 2, plot_points: 16, ..Default::default() })?;
    let coherence = nominal.limits.coherence_probe_limit_s;
    let mut search = Search { d: design, s: &scaling, req, output, evaluations: 1 };
    let rounds_list: Vec<u32> = match req.max_rounds {
        Some(m) => (1..=m).collect(),
        None => vec![design.detection.rounds],
    };
    let mut per_rounds = Vec::new();
    let mut best: Option<(u32, f64, f64, [f64; 2], RangeEnd, Vec<ScanPoint>)> = None;
    let mut first_problem = None;
    for &r in &rounds_list {
        let (range, end) = search.range(r, coherence);
        if !(range[1] > range[0]) {
            first_problem.get_or_insert_with(|| format!("with {r} detection rounds the longest probe time, {} s, set by {}, is below the shortest, {} s", show(range[1]), end.describe(), show(range[0])));
            continue;
        }
        let (t, v, scan) = search.run(r, range);
        if !v.is_finite() {
            if first_problem.is_none() {
                first_problem = Some(search.eval(t, r).err().unwrap_or_else(|| "no finite sigma".into()));
            }
            continue;
        }
        per_rounds.push(RoundsBest { rounds: r, probe_time_s: t, sigma: v });
        if best.as_ref().map(|b| v < b.2).unwrap_or(true) {
            best = Some((r, t, v, range, end, scan));
        }
    }
    let Some((rounds, t, sigma, range, range_end, scan)) = best else {
        return Err(InputError::single("probe_min_s", format!("{} s to {} s", show(req.probe_min_s), show(req.probe_max_s)), format!("no probe time in the range gives a valid design: {}", first_problem.unwrap_or_default())));
    };
    let at = search.eval(t, rounds).map_err(|e| InputError::single("(optimum)", show(t), e))?;
    let c0 = parts(&at);
    let at_range_end = t >= range[1] * (1.0 - 1e-6);
    let h = 0.05;
    let lifetime_matters = at.limits.probe_over_lifetime >= 0.05;
    let dominant = argmax(c0);
    let mechanism = if at_range_end {
        if range_end == RangeEnd::LaserCoherence {
            OptimumMechanism::LaserCoherence
        } else {
            let fall = match search.eval((t * libm::exp(-h)).max(range[0]), rounds) {
                Ok(e) => {
                    let cm = parts(&e);
                    argmax([cm[0] - c0[0], cm[1] - c0[1], cm[2] - c0[2]])
                }
                Err(_) => dominant,
            };
            [OptimumMechanism::LaserNoise, OptimumMechanism::ProjectionNoise, OptimumMechanism::DeadTime][fall]
        }
    } else {
        let rise = match search.eval((t * libm::exp(h)).min(range[1]), rounds) {
            Ok(e) => {
                let cp = parts(&e);
                argmax([cp[0] - c0[0], cp[1] - c0[1], cp[2] - c0[2]])
            }
            Err(_) => dominant,
        };
        match rise {
            0 => OptimumMechanism::LaserNoise,
            1 if lifetime_matters => OptimumMechanism::Lifetime,
            1 => OptimumMechanism::ProjectionNoise,
            _ => OptimumMechanism::DickEffect,
        }
    };
    let what = match scaling.shape {
        ProbeShape::RamseyFreeTime => "free-evolution time",
        ProbeShape::RabiPulseTime => "pulse time",
    };
    let end_text = range_end.describe();
    let explanation = match mechanism {
        OptimumMechanism::ProjectionNoise if at_range_end => format!("Projection noise keeps falling with longer probes: the best {what} is the longest allowed, set by {end_text}."),
        OptimumMechanism::DeadTime => format!("The Dick effect from the dead time keeps falling as longer probes fill the cycle: the best {what} is the longest allowed, set by {end_text}."),
        OptimumMechanism::LaserNoise if at_range_end => format!("The laser noise the servo leaves keeps falling with longer probes: the best {what} is the longest allowed, set by {end_text}."),
        OptimumMechanism::LaserCoherence => format!("The best {what} is the laser-coherence limit: beyond it the free laser's RMS phase over the probe exceeds 1 rad."),
        OptimumMechanism::Lifetime => format!("Decay of the excited state sets the optimum: at {:.2} lifetimes of probe, projection noise rises again with longer probes.", at.limits.probe_over_lifetime),
        OptimumMechanism::DickEffect => format!("The Dick effect sets the optimum: it rises with longer {what}s beyond it."),
        OptimumMechanism::LaserNoise => format!("The laser noise the servo leaves sets the optimum: it rises with longer cycles beyond it."),
        OptimumMechanism::ProjectionNoise => format!("Projection noise sets the optimum: it rises again with longer {what}s beyond it."),
    };
    Ok(Optimum {
        tau_s: req.tau_s,
        probe_shape: scaling.shape,
        start_probe_time_s: scaling.probe_time_s,
        probe_time_s: t,
        rounds,
        sigma,
        laser: libm::sqrt(c0[0]),
        projection: libm::sqrt(c0[1]),
        dick: libm::sqrt(c0[2]),
        range_s: range,
        range_end,
        at_range_end,
        mechanism,
        explanation,
        cycle_time_s: at.cycle_time_s,
        probe_over_lifetime: at.limits.probe_over_lifetime,
        probe_phase_rms_rad: at.limits.probe_phase_rms_rad,
        coherence_probe_limit_s: at.limits.coherence_probe_limit_s,
        per_rounds,
        scan,
        evaluations: search.evaluations,
        design: scaling.apply(design, t, rounds, req.attack_cycles),
    })
}
