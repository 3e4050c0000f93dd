//! Line shape, operating point and the quantum projection noise limit.
//!
//! sigma_y(tau) = sqrt(xi^2 P'(1 - P') / N) / (nu0 |dP'/dnu|) * sqrt(T_c / tau)
//! (Phys. Rev. A 47, 3554 (1993)), where P' = e_g + (1 - e_g - e_e) P is
//! the probability of reading "excited" with misassignment probabilities e_g (ground
//! read as excited) and e_e (excited read as ground) after a majority vote over the
//! detection rounds, and xi^2 the squeezing factor (Phys. Rev. A 50, 67 (1994)). A GHZ
//! state of N atoms is treated as one two-level system with N-fold detuning, read once.

use crate::design::{Design, Entanglement, OperatingPointRule};
use crate::error::InputError;
use crate::sequence::Probe;

/// Grid intervals on the flank when searching the operating point.
const SEARCH_POINTS: usize = 24;
/// Steps of the outward walk that finds the edge of the central feature, over
/// EDGE_SPAN / (probe duration) Hz.
const EDGE_STEPS: usize = 32;
const EDGE_SPAN: f64 = 4.0;
/// Fraction of the feature's height excluded at its top and bottom when searching the
/// best slope-to-noise point.
pub const FLANK_MARGIN: f64 = 0.05;

/// Misassignment probability after a majority vote over `rounds` independent rounds
/// with per-round error `e` (ties of an even count decided by a fair coin).
pub fn majority_error(e: f64, rounds: u32) -> f64 {
    let n = rounds.max(1);
    let mut total = 0.0;
    // Binomial terms by recurrence: C(n,k) e^k (1-e)^(n-k).
    let mut term = libm::pow(1.0 - e, n as f64); // k = 0
    for k in 0..=n {
        if k > 0 {
            term *= (n - k + 1) as f64 / k as f64 * e / (1.0 - e);
        }
        if 2 * k > n {
            total += term;
        } else if 2 * k == n {
            total += 0.5 * term;
        }
    }
    total.clamp(0.0, 1.0)
}

/// Detection model: measured = e_g + (1 - e_g - e_e) P.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Readout {
    pub e_g: f64,
    pub e_e: f64,
}

impl Readout {
    pub fn from_design(d: &Design) -> Readout {
        Readout { e_g: majority_error(d.detection.misread_ground, d.detection.rounds), e_e: majority_error(d.detection.misread_excited, d.detection.rounds) }
    }
    #[inline]
    pub fn measured(&self, p: f64) -> f64 {
        self.e_g + (1.0 - self.e_g - self.e_e) * p
    }
    #[inline]
    pub fn contrast(&self) -> f64 {
        1.0 - self.e_g - self.e_e
    }
}

/// The operating point and the numbers at it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Operating {
    pub detuning_hz: f64,
    pub excitation: f64,
    pub measured: f64,
    /// d(measured)/d(nu), 1/Hz.
    pub slope: f64,
    pub best_hz: f64,
    pub half_max_hz: f64,
    pub peak: f64,
    /// Edge of the central feature (first extremum away from line centre), Hz.
    pub edge_hz: f64,
}

fn slope(probe: &Probe, ro: &Readout, nu: f64, step: f64) -> f64 {
    ro.contrast() * (probe.excitation(nu + step) - probe.excitation(nu - step)) / (2.0 * step)
}

/// Figure of merit |dP'/dnu| / sqrt(P'(1-P')), or 0 where it is undefined. P is taken as
/// the mean of the two points of the central difference (error of order step^2, 1e-10
/// of the feature's width squared).
fn merit(probe: &Probe, ro: &Readout, nu: f64, step: f64) -> f64 {
    let (a, b) = (probe.excitation(nu + step), probe.excitation(nu - step));
    let pm = ro.measured((a + b) / 2.0);
    let var = pm * (1.0 - pm);
    if var <= 1e-300 {
        return 0.0;
    }
    (ro.contrast() * (a - b) / (2.0 * step)).abs() / libm::sqrt(var)
}

/// Root of `f` in [a, b] where f changes sign, by the Illinois variant of regula falsi.
fn solve(f: impl Fn(f64) -> f64, mut a: f64, mut b: f64) -> f64 {
    let (mut fa, mut fb) = (f(a), f(b));
    if fa == 0.0 {
        return a;
    }
    if fb == 0.0 || fa * fb > 0.0 {
        return b;
    }
    let tol = 1e-13 * (a.abs() + b.abs());
    let mut side = 0;
    for _ in 0..100 {
        let c = (a * fb - b * fa) / (fb - fa);
        let fc = f(c);
        if fc * fb > 0.0 {
            b = c;
            fb = fc;
            if side == -1 {
                fa /= 2.0;
            }
            side = -1;
        } else if fc * fa > 0.0 {
            a = c;
            fa = fc;
            if side == 1 {
                fb /= 2.0;
            }
            side = 1;
        } else {
            return c;
        }
        if (b - a).abs() < tol {
            break;
        }
    }
    (a + b) / 2.0
}

/// Extremum of `f` in [a, b] by golden section; `sign` +1 for a maximum, -1 for a minimum.
fn golden(f: impl Fn(f64) -> f64, mut a: f64, mut b: f64, sign: f64, iterations: usize) -> f64 {
    let r = 0.618_033_988_749_894_8;
    let mut c = b - r * (b - a);
    let mut d = a + r * (b - a);
    let (mut fc, mut fd) = (sign * f(c), sign * f(d));
    for _ in 0..iterations {
        if fc > fd {
            b = d;
            d = c;
            fd = fc;
            c = b - r * (b - a);
            fc = sign * f(c);
        } else {
            a = c;
            c = d;
            fc = fd;
            d = a + r * (b - a);
            fd = sign * f(d);
        }
    }
    (a + b) / 2.0
}

/// Finds the central feature, its best slope-to-noise and half-maximum points, and the
/// operating point the design asks for.
pub fn operating_point(probe: &Probe, ro: &Readout, rule: OperatingPointRule) -> Result<Operating, InputError> {
    let w = probe.width_scale_hz();
    let step = w * 1e-5;
    let p0 = probe.excitation(0.0);
    // Edge of the central feature: walk outwards until the excitation turns, then locate
    // the turning point by golden section.
    let h = EDGE_SPAN / EDGE_STEPS as f64 * w;
    let mut prev = p0;
    let mut rising = None;
    let mut edge = EDGE_SPAN * w;
    for k in 1..=EDGE_STEPS {
        let nu = h * k as f64;
        let p = probe.excitation(nu);
        if p != prev {
            let up = p > prev;
            match rising {
                None => rising = Some(up),
                Some(r) if r != up => {
                    let sign = if r { 1.0 } else { -1.0 };
                    edge = golden(|x| probe.excitation(x), (nu - 2.0 * h).max(0.0), nu, sign, 20);
                    break;
                }
                _ => {}
            }
        }
        prev = p;
    }
    let p_edge = probe.excitation(edge);
    if (p0 - p_edge).abs() < 1e-6 {
        return Err(InputError::single(
            "sequence.segments",
            format!("central feature of height {:.2e}", (p0 - p_edge).abs()),
            "the sequence gives no usable line: the excitation hardly changes with detuning",
        ));
    }
    // The flank: where the excitation lies more than FLANK_MARGIN of the feature's height
    // away from its top and bottom. At the very top and bottom the slope vanishes; without
    // detection errors the slope-to-noise ratio has a finite limit there, which no lock
    // can use (common practice: lock on the flank).
    let height = p0 - p_edge;
    let crossing = |frac: f64| solve(|nu| probe.excitation(nu) - (p_edge + frac * height), 0.0, edge);
    let flank_lo = crossing(1.0 - FLANK_MARGIN);
    let flank_hi = crossing(FLANK_MARGIN);
    // Best slope-to-noise on a grid over the flank, refined by a parabola through the
    // best grid point and its neighbours.
    let at = |k: usize| flank_lo + (flank_hi - flank_lo) * k as f64 / SEARCH_POINTS as f64;
    let merits: Vec<f64> = (0..=SEARCH_POINTS).map(|k| merit(probe, ro, at(k), step)).collect();
    let mut best_k = 0;
    for k in 1..=SEARCH_POINTS {
        if merits[k] > merits[best_k] {
            best_k = k;
        }
    }
    let best_m = merits[best_k];
    // Where the merit is flat to 1e-6 (ideal Ramsey), prefer the point nearest half height.
    let half_level = (p0 + p_edge) / 2.0;
    let half_max_hz = solve(|nu| probe.excitation(nu) - half_level, 0.0, edge);
    let flat = merits.iter().filter(|&&m| m >= best_m * (1.0 - 1e-6)).count();
    let best_hz = if flat > 2 {
        let lo = (0..=SEARCH_POINTS).find(|&k| merits[k] >= best_m * (1.0 - 1e-6)).map(at).unwrap_or(flank_lo);
        let hi = (0..=SEARCH_POINTS).rev().find(|&k| merits[k] >= best_m * (1.0 - 1e-6)).map(at).unwrap_or(flank_hi);
        half_max_hz.max(lo).min(hi)
    } else if best_k == 0 || best_k == SEARCH_POINTS {
        at(best_k)
    } else {
        // Successive parabolic interpolation on the bracket around the best grid point.
        let (mut x0, mut x1, mut x2) = (at(best_k - 1), at(best_k), at(best_k + 1));
        let (mut m0, mut m1, mut m2) = (merits[best_k - 1], merits[best_k], merits[best_k + 1]);
        for _ in 0..6 {
            let (a, b) = ((x1 - x0) * (m1 - m2), (x1 - x2) * (m1 - m0));
            let denom = a - b;
            if denom == 0.0 {
                break;
            }
            let x = x1 - 0.5 * ((x1 - x0) * a - (x1 - x2) * b) / denom;
            if !(x > x0 && x < x2) || (x - x1).abs() < 1e-12 * (x2 - x0) {
                break;
            }
            let m = merit(probe, ro, x, step);
            if x < x1 {
                if m > m1 {
                    (x2, m2, x1, m1) = (x1, m1, x, m);
                } else {
                    (x0, m0) = (x, m);
                }
            } else if m > m1 {
                (x0, m0, x1, m1) = (x1, m1, x, m);
            } else {
                (x2, m2) = (x, m);
            }
        }
        x1
    };
    let nu = match rule {
        OperatingPointRule::BestSlopeToNoise => best_hz,
        OperatingPointRule::HalfMaximum => half_max_hz,
    };
    let p = probe.excitation(nu);
    let s = slope(probe, ro, nu, step);
    if s.abs() * w < 1e-9 {
        return Err(InputError::single("lock.operating_point", format!("{nu:.3e} Hz"), "the line has no slope at the operating point"));
    }
    Ok(Operating { detuning_hz: nu, excitation: p, measured: ro.measured(p), slope: s, best_hz, half_max_hz, peak: p0.max(p_edge), edge_hz: edge })
}

/// Projection-noise numbers of a design at an operating point.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Projection {
    pub sigma_1s: f64,
    pub effective_atoms: f64,
    pub squeezing_factor: f64,
}

/// sigma_y at 1 s from projection noise (white frequency noise: sigma(tau) = sigma_1s/sqrt(tau)).
pub fn projection_noise(d: &Design, op: &Operating, cycle_s: f64) -> Projection {
    let (n_eff, xi2) = match d.atoms.entanglement {
        Entanglement::None => (d.atoms.count as f64, 1.0),
        Entanglement::Squeezed { gain_db } => (d.atoms.count as f64, libm::pow(10.0, -gain_db / 10.0)),
        Entanglement::Ghz => (1.0, 1.0),
    };
    let pm = op.measured;
    let sigma = libm::sqrt(xi2 * pm * (1.0 - pm) / n_eff) / (d.transition.frequency_hz * op.slope.abs()) * libm::sqrt(cycle_s);
    Projection { sigma_1s: sigma, effective_atoms: n_eff, squeezing_factor: xi2 }
}
