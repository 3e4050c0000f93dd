//! Two-level dynamics of the interrogation sequence: Bloch-vector propagation with
//! optional decay of the excited state, the line shape P(detuning), and presets.
//!
//! Conventions: the Bloch vector r = (u, v, w) with w = P_e - P_g; the atoms start in
//! the ground state (0, 0, -1). In the frame of the laser, a segment with Rabi frequency
//! Omega (rad/s), phase phi and detuning delta = omega_laser - omega_atom (rad/s) turns r
//! about (Omega cos phi, Omega sin phi, -delta). Decay of the excited state at rate
//! Gamma = 1/lifetime damps u and v at Gamma/2 and relaxes w to -1 at Gamma (optical
//! Bloch equations with amplitude damping).

use crate::design::{Design, Entanglement, Segment};
use serde::{Deserialize, Serialize};
use std::f64::consts::PI;

/// An affine map of the Bloch vector, r -> m r + c.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Affine {
    pub m: [[f64; 3]; 3],
    pub c: [f64; 3],
}

impl Affine {
    pub const IDENTITY: Affine = Affine { m: [[1.0, 0.0, 0.0], [0.0, 1.0, 0.0], [0.0, 0.0, 1.0]], c: [0.0; 3] };

    #[inline]
    pub fn apply(&self, r: [f64; 3]) -> [f64; 3] {
        let m = &self.m;
        [
            m[0][0] * r[0] + m[0][1] * r[1] + m[0][2] * r[2] + self.c[0],
            m[1][0] * r[0] + m[1][1] * r[1] + m[1][2] * r[2] + self.c[1],
            m[2][0] * r[0] + m[2][1] * r[1] + m[2][2] * r[2] + self.c[2],
        ]
    }

    /// Applies the transpose of the linear part (propagates a costate backwards).
    #[inline]
    pub fn apply_transpose(&self, l: [f64; 3]) -> [f64; 3] {
        let m = &self.m;
        [
            m[0][0] * l[0] + m[1][0] * l[1] + m[2][0] * l[2],
            m[0][1] * l[0] + m[1][1] * l[1] + m[2][1] * l[2],
            m[0][2] * l[0] + m[1][2] * l[1] + m[2][2] * l[2],
        ]
    }
}

/// One constant piece of the probe: drive on (pulse) or off (free evolution).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Step {
    pub duration_s: f64,
    /// Rabi frequency, rad/s (0 for free evolution).
    pub omega: f64,
    /// Drive phase, rad.
    pub phase: f64,
    /// Extra detuning during this step, rad/s.
    pub offset: f64,
}

/// The generator of one step at a given detuning: dr/dt = a r + b, with b = (0, 0, -gamma).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Generator {
    pub a: [[f64; 3]; 3],
    pub gamma: f64,
    /// Rotation vector (Omega cos phi, Omega sin phi, -delta), rad/s.
    pub axis: [f64; 3],
}

impl Generator {
    pub fn new(step: &Step, detuning: f64, gamma: f64) -> Generator {
        let delta = detuning + step.offset;
        // A zero phase needs no trigonometry (and gives the same cos = 1, sin = 0).
        let (s, c) = if step.phase == 0.0 || step.omega == 0.0 { (0.0, 1.0) } else { libm::sincos(step.phase) };
        let axis = [step.omega * c, step.omega * s, -delta];
        let [x, y, z] = axis;
        let h = gamma / 2.0;
        let a = [[-h, -z, y], [z, -h, -x], [-y, x, -gamma]];
        Generator { a, gamma, axis }
    }

    /// Largest rate in the generator, rad/s: bounds how fast g(t) can vary.
    pub fn rate(&self) -> f64 {
        let [x, y, z] = self.axis;
        libm::sqrt(x * x + y * y + z * z) + self.gamma
    }

    /// The exact propagator over time `t`.
    pub fn propagator(&self, t: f64) -> Affine {
        if self.gamma == 0.0 {
            rotation(self.axis, t)
        } else if self.axis[0] == 0.0 && self.axis[1] == 0.0 {
            free_with_decay(self.axis[2], self.gamma, t)
        } else {
            driven_with_decay(self.axis, self.gamma, t).unwrap_or_else(|| expm_affine(&self.a, self.gamma, t))
        }
    }

    /// The propagator by the general scaling-and-squaring series, whatever the step: the
    /// path taken where the closed forms are ill-conditioned, and their check.
    pub fn propagator_by_series(&self, t: f64) -> Affine {
        expm_affine(&self.a, self.gamma, t)
    }
}

/// A driven step with decay in closed form, where it is well conditioned (None elsewhere).
///
/// With h = gamma/2 the generator is a = -h I + B, B = [[0, -z, y], [z, 0, -x], [-y, x, -h]],
/// whose characteristic polynomial is p(l) = l^3 + h l^2 + n^2 l + h z^2 (n = |axis|). Its
/// real root r lies in [-h, 0] (p(-h) <= 0 <= p(0)) and is found by Newton steps from
/// -h z^2/n^2. Q = B - r I has the eigenvalues 0 and q, conj(q) with q = alpha + i beta, so
/// by Cayley-Hamilton exp(Q t) = I + f1 Q + f2 Q^2 with f1 + f2 q = (exp(q t) - 1)/q
/// (the Cayley-Hamilton form), and exp(a t) = exp((r - h) t) exp(Q t). The inhomogeneous part follows
/// from the steady state r_ss of the optical Bloch equations, c = r_ss - exp(a t) r_ss.
/// Taken when beta t >= 1/2 and the pair is well separated (beta^2 >= c/2); the
/// cancellations of the form stay at rounding level there.
fn driven_with_decay(axis: [f64; 3], gamma: f64, t: f64) -> Option<Affine> {
    let [x, y, z] = axis;
    let h = gamma / 2.0;
    let rho2 = x * x + y * y;
    let n2 = rho2 + z * z;
    let hz2 = h * z * z;
    // Newton steps safeguarded by bisection on the bracket [-h, 0]; p is increasing
    // through its only real root, so the bracket shrinks towards it.
    let (mut lo, mut hi) = (-h, 0.0);
    let mut r = -hz2 / n2;
    let mut converged = false;
    for _ in 0..60 {
        let p = ((r + h) * r + n2) * r + hz2;
        if p == 0.0 {
            converged = true;
            break;
        }
        if p > 0.0 { hi = r } else { lo = r }
        let dp = (3.0 * r + 2.0 * h) * r + n2;
        let mut next = r - p / dp;
        let newton = next > lo && next < hi;
        if !newton {
            next = 0.5 * (lo + hi);
        }
        let dr = next - r;
        r = next;
        // Quadratic convergence: after a Newton step this small the error is at rounding.
        if (newton && dr.abs() <= 1e-8 * r.abs()) || hi - lo <= 1e-16 * h {
            converged = true;
            break;
        }
    }
    if !converged {
        return None;
    }
    let r = r.max(-h).min(0.0);
    let b = h + r;
    let c = n2 + r * b;
    let w2 = c - b * b / 4.0;
    if !(w2 >= 0.5 * c) {
        return None;
    }
    let beta = libm::sqrt(w2);
    if !(beta * t >= 0.5) {
        return None;
    }
    let alpha = -(h + 3.0 * r) / 2.0;
    let (sb, cb) = libm::sincos(beta * t);
    // exp(q t) - 1 = re1 + i im1 with alpha t small: expm1 keeps it accurate, and
    // cos(beta t) - 1 has no harmful cancellation for beta t >= 1/2.
    let em1 = libm::expm1(alpha * t);
    let re1 = em1 * cb + (cb - 1.0);
    let im1 = (1.0 + em1) * sb;
    let q2 = alpha * alpha + beta * beta;
    let f2 = (im1 * alpha / beta - re1) / q2;
    let f1 = (re1 * alpha + im1 * beta) / q2 - f2 * alpha;
    let q = [[-r, -z, y], [z, -r, -x], [-y, x, -h - r]];
    let q_sq = mul3(&q, &q);
    let scale = libm::exp((r - h) * t);
    let mut m = [[0.0; 3]; 3];
    for i in 0..3 {
        for j in 0..3 {
            let id = if i == j { 1.0 } else { 0.0 };
            m[i][j] = scale * (id + f1 * q[i][j] + f2 * q_sq[i][j]);
        }
    }
    // Steady state: w = -1/(1 + s), s = rho^2 / (2 (h^2 + z^2)).
    // (u, v) = w (h y + z x, z y - h x) / (h^2 + z^2), with the common factor cancelled.
    let den = rho2 + 2.0 * (h * h + z * z);
    let ss = [-2.0 * (h * y + z * x) / den, -2.0 * (z * y - h * x) / den, -2.0 * (h * h + z * z) / den];
    let e_ss = Affine { m, c: [0.0; 3] }.apply(ss);
    let out = Affine { m, c: [ss[0] - e_ss[0], ss[1] - e_ss[1], ss[2] - e_ss[2]] };
    // Extreme rates (under- or overflow of the squares) go to the general series.
    let finite = out.m.iter().flatten().chain(out.c.iter()).all(|v| v.is_finite());
    finite.then_some(out)
}

/// Rotation about `axis` by |axis| t (Rodrigues' formula).
fn rotation(axis: [f64; 3], t: f64) -> Affine {
    let n2 = axis[0] * axis[0] + axis[1] * axis[1] + axis[2] * axis[2];
    if n2 == 0.0 {
        return Affine::IDENTITY;
    }
    let n = libm::sqrt(n2);
    let th = n * t;
    let (s, c) = libm::sincos(th);
    let k = [axis[0] / n, axis[1] / n, axis[2] / n];
    let kx = [[0.0, -k[2], k[1]], [k[2], 0.0, -k[0]], [-k[1], k[0], 0.0]];
    let mut m = [[0.0; 3]; 3];
    for i in 0..3 {
        for j in 0..3 {
            let k2 = k[i] * k[j] - if i == j { 1.0 } else { 0.0 };
            m[i][j] = if i == j { 1.0 } else { 0.0 } + s * kx[i][j] + (1.0 - c) * k2;
        }
    }
    Affine { m, c: [0.0; 3] }
}

/// Free evolution with decay, exactly: (u, v) turn about z at rate `wz` and shrink by
/// exp(-gamma t / 2); w relaxes to -1 as exp(-gamma t).
fn free_with_decay(wz: f64, gamma: f64, t: f64) -> Affine {
    let (s, c) = libm::sincos(wz * t);
    let d = libm::exp(-gamma * t / 2.0);
    let d2 = d * d;
    Affine { m: [[d * c, -d * s, 0.0], [d * s, d * c, 0.0], [0.0, 0.0, d2]], c: [0.0, 0.0, d2 - 1.0] }
}

type M3 = [[f64; 3]; 3];

#[inline]
fn mul3(a: &M3, b: &M3) -> M3 {
    let mut r = [[0.0; 3]; 3];
    for i in 0..3 {
        for j in 0..3 {
            r[i][j] = a[i][0] * b[0][j] + a[i][1] * b[1][j] + a[i][2] * b[2][j];
        }
    }
    r
}

/// Propagator of dr/dt = a r + b over time t, b = (0, 0, -gamma): r -> E r + t phi1(a t) b
/// with E = exp(a t) and phi1(X) = (exp(X) - I)/X = sum_k X^k/(k+1)!. After scaling the
/// norm under 1/2, phi1 is its degree-13 Taylor polynomial (truncation below 2e-17)
/// evaluated by the Paterson-Stockmeyer scheme (six products), E = I + X phi1(X), and
/// squaring restores the scale with E(2X) = E(X)^2 and phi1(2X) = (E(X) + I) phi1(X) / 2.
fn expm_affine(a: &M3, gamma: f64, t: f64) -> Affine {
    let mut x = [[0.0; 3]; 3];
    for i in 0..3 {
        for j in 0..3 {
            x[i][j] = a[i][j] * t;
        }
    }
    let norm = (0..3).map(|i| x[i].iter().map(|v| v.abs()).sum::<f64>()).fold(0.0, f64::max);
    let mut s = 0u32;
    if norm > 0.5 {
        s = (libm::ceil(libm::log2(norm / 0.5)) as i64).clamp(0, 1000) as u32;
    }
    let scale = libm::ldexp(1.0, -(s as i32));
    for row in x.iter_mut() {
        for v in row.iter_mut() {
            *v *= scale;
        }
    }
    // Coefficients c_k = 1/(k+1)!, k = 0..=15 (degree 15 in blocks of four).
    let mut c = [0.0; 16];
    let mut f = 1.0;
    for (k, ck) in c.iter_mut().enumerate() {
        f *= (k + 1) as f64;
        *ck = 1.0 / f;
    }
    let x2 = mul3(&x, &x);
    let x3 = mul3(&x2, &x);
    let x4 = mul3(&x2, &x2);
    let block = |b: usize| -> M3 {
        let mut m = [[0.0; 3]; 3];
        for i in 0..3 {
            for j in 0..3 {
                m[i][j] = c[b + 1] * x[i][j] + c[b + 2] * x2[i][j] + c[b + 3] * x3[i][j];
            }
            m[i][i] += c[b];
        }
        m
    };
    let mut phi = block(12);
    for b in [8, 4, 0] {
        let mut next = mul3(&x4, &phi);
        let add = block(b);
        for i in 0..3 {
            for j in 0..3 {
                next[i][j] += add[i][j];
            }
        }
        phi = next;
    }
    let mut e = mul3(&x, &phi);
    for (i, row) in e.iter_mut().enumerate() {
        row[i] += 1.0;
    }
    for _ in 0..s {
        let mut ep = e;
        for (i, row) in ep.iter_mut().enumerate() {
            row[i] += 1.0;
        }
        phi = mul3(&ep, &phi);
        for row in phi.iter_mut() {
            for v in row.iter_mut() {
                *v *= 0.5;
            }
        }
        e = mul3(&e, &e);
    }
    let bt = -gamma * t;
    Affine { m: e, c: [phi[0][2] * bt, phi[1][2] * bt, phi[2][2] * bt] }
}

/// The probe part of a cycle (first pulse to last pulse) and the cycle's timing.
#[derive(Debug, Clone, PartialEq)]
pub struct Probe {
    pub steps: Vec<Step>,
    /// Decay rate of the excited state, 1/s.
    pub gamma: f64,
    /// Factor on the laser detuning seen by the atoms (N for a GHZ state, else 1).
    pub detuning_factor: f64,
    /// Start of the first pulse within the cycle, s.
    pub start_s: f64,
    /// Cycle time, s.
    pub cycle_s: f64,
}

pub const GROUND: [f64; 3] = [0.0, 0.0, -1.0];

impl Probe {
    /// Builds the probe of a validated design.
    pub fn from_design(d: &Design) -> Probe {
        let segs = &d.sequence.segments;
        let first = segs.iter().position(|s| matches!(s, Segment::Pulse { .. })).unwrap_or(0);
        let last = segs.iter().rposition(|s| matches!(s, Segment::Pulse { .. })).unwrap_or(0);
        let rounds = d.detection.rounds.max(1) as f64;
        let mut start_s = 0.0;
        for s in &segs[..first] {
            start_s += match s {
                Segment::Dead { label: crate::design::DeadLabel::Detection, duration_s } => duration_s * rounds,
                s => s.duration_s(),
            };
        }
        let steps = segs[first..=last]
            .iter()
            .map(|s| match *s {
                Segment::Pulse { duration_s, area_pi, phase_deg, detuning_offset_hz } => Step {
                    duration_s,
                    omega: area_pi * PI / duration_s,
                    phase: phase_deg.to_radians(),
                    offset: 2.0 * PI * detuning_offset_hz,
                },
                Segment::Free { duration_s } | Segment::Dead { duration_s, .. } => Step { duration_s, omega: 0.0, phase: 0.0, offset: 0.0 },
            })
            .collect();
        let gamma = d.transition.lifetime_s.map(|t| 1.0 / t).unwrap_or(0.0);
        let detuning_factor = match d.atoms.entanglement {
            Entanglement::Ghz => d.atoms.count as f64,
            _ => 1.0,
        };
        Probe { steps, gamma, detuning_factor, start_s, cycle_s: d.cycle_time_s() }
    }

    /// Total probe duration, s.
    pub fn duration_s(&self) -> f64 {
        self.steps.iter().map(|s| s.duration_s).sum()
    }

    /// Generators of all steps at laser detuning `nu_hz` (Hz).
    pub fn generators(&self, nu_hz: f64) -> Vec<Generator> {
        let det = 2.0 * PI * nu_hz * self.detuning_factor;
        self.steps.iter().map(|s| Generator::new(s, det, self.gamma)).collect()
    }

    /// Bloch vector at the end of the probe, laser detuning `nu_hz` (Hz).
    pub fn final_state(&self, nu_hz: f64) -> [f64; 3] {
        let det = 2.0 * PI * nu_hz * self.detuning_factor;
        let mut r = GROUND;
        // Identical steps (the two pi/2 pulses of Ramsey, say) share one propagator; the
        // first few distinct ones are remembered on the stack.
        const KEEP: usize = 8;
        let mut done = [(0usize, Affine::IDENTITY); KEEP];
        let mut n_done = 0;
        for (i, s) in self.steps.iter().enumerate() {
            let prop = match done[..n_done].iter().find(|(j, _)| self.steps[*j] == *s) {
                Some(&(_, p)) => p,
                None => {
                    let p = Generator::new(s, det, self.gamma).propagator(s.duration_s);
                    if n_done < KEEP {
                        done[n_done] = (i, p);
                        n_done += 1;
                    }
                    p
                }
            };
            r = prop.apply(r);
        }
        r
    }

    /// Excitation probability at the end of the probe, laser detuning `nu_hz` (Hz).
    pub fn excitation(&self, nu_hz: f64) -> f64 {
        ((self.final_state(nu_hz)[2] + 1.0) / 2.0).clamp(0.0, 1.0)
    }

    /// Whether the line shape is even in the detuning, P(-nu) = P(nu): every drive phase is
    /// 0 or pi and no step has a detuning offset. Then the reflection u -> -u maps the
    /// Bloch equations at detuning delta onto those at -delta, leaving the ground state,
    /// the decay terms and w unchanged.
    pub fn line_is_even(&self) -> bool {
        self.steps.iter().all(|s| s.offset == 0.0 && (s.omega == 0.0 || s.phase == 0.0 || s.phase.abs() == PI))
    }

    /// A frequency scale of the central feature, Hz: 1/(probe duration x detuning factor).
    pub fn width_scale_hz(&self) -> f64 {
        1.0 / (self.duration_s() * self.detuning_factor)
    }
}

/// Ready-made probe sequences.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "snake_case", deny_unknown_fields)]
pub enum Preset {
    /// One pi pulse of the given duration.
    Rabi { probe_time_s: f64 },
    /// pi/2 pulse, free evolution, pi/2 pulse.
    Ramsey { pulse_s: f64, free_s: f64 },
    /// A light-shift-robust variant (hyper-Ramsey type, Phys. Rev. A 82, 011804 (2010)):
    /// pi/2 pulse, free evolution, a pi pulse of twice the duration with inverted phase,
    /// and a final pi/2 pulse.
    HyperRamsey { pulse_s: f64, free_s: f64 },
}

/// A preset with its identifier and title, for menus.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PresetInfo {
    pub id: String,
    pub title: String,
    pub preset: Preset,
}

impl Preset {
    /// Checks the preset's durations (same limits as segments), naming `preset.<field>`.
    pub fn validate(&self) -> Result<(), crate::error::InputError> {
        use crate::design::caps::{MAX_DURATION_S, MIN_DURATION_S};
        let mut c = crate::error::Checker::new();
        match *self {
            Preset::Rabi { probe_time_s } => {
                c.range("preset.probe_time_s", probe_time_s, MIN_DURATION_S, MAX_DURATION_S, "s");
            }
            Preset::Ramsey { pulse_s, free_s } | Preset::HyperRamsey { pulse_s, free_s } => {
                c.range("preset.pulse_s", pulse_s, MIN_DURATION_S, MAX_DURATION_S / 2.0, "s");
                c.range("preset.free_s", free_s, MIN_DURATION_S, MAX_DURATION_S, "s");
            }
        }
        c.finish()
    }

    /// The probe segments of the preset (dead time is added by the design).
    pub fn segments(&self) -> Vec<Segment> {
        let pulse = |duration_s: f64, area_pi: f64, phase_deg: f64| Segment::Pulse { duration_s, area_pi, phase_deg, detuning_offset_hz: 0.0 };
        match *self {
            Preset::Rabi { probe_time_s } => vec![pulse(probe_time_s, 1.0, 0.0)],
            Preset::Ramsey { pulse_s, free_s } => vec![pulse(pulse_s, 0.5, 0.0), Segment::Free { duration_s: free_s }, pulse(pulse_s, 0.5, 0.0)],
            Preset::HyperRamsey { pulse_s, free_s } => vec![
                pulse(pulse_s, 0.5, 0.0),
                Segment::Free { duration_s: free_s },
                pulse(2.0 * pulse_s, 1.0, 180.0),
                pulse(pulse_s, 0.5, 0.0),
            ],
        }
    }
}

/// The presets with typical parameters, for menus.
pub fn presets() -> Vec<PresetInfo> {
    vec![
        PresetInfo { id: "rabi".into(), title: "Rabi (one pi pulse)".into(), preset: Preset::Rabi { probe_time_s: 0.1 } },
        PresetInfo { id: "ramsey".into(), title: "Ramsey (pi/2 - free - pi/2)".into(), preset: Preset::Ramsey { pulse_s: 0.005, free_s: 0.2 } },
        PresetInfo {
            id: "hyper_ramsey".into(),
            title: "Hyper-Ramsey (pi/2 - free - pi - pi/2)".into(),
            preset: Preset::HyperRamsey { pulse_s: 0.005, free_s: 0.2 },
        },
    ]
}
