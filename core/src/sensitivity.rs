//! The sensitivity function g(t) of a sequence, from the two-level dynamics.
//!
//! g(t) is twice the change of the excitation probability per radian of a small laser
//! phase step at time t (IEEE Trans. UFFC 45, 887 (1998)): with the
//! Bloch vector r(t) propagated forwards from the ground state and the costate
//! lambda(t) = d w_final / d r(t) propagated backwards, a phase step dphi turns r by
//! -dphi about z, so g(t) = lambda_x r_y - lambda_y r_x.
//!
//! g is represented exactly enough to integrate in closed form: on each piece of a pulse
//! (at most one radian of the fastest rate) by its Taylor polynomial of degree
//! [`DEGREE`] computed from exact derivatives of r and lambda; on free evolution by a
//! constant (g is exactly constant there, with or without decay); zero in dead time.

use crate::error::InputError;
use crate::sequence::{Affine, Probe, GROUND};

/// Degree of the Taylor polynomial on each piece.
pub const DEGREE: usize = 16;
/// Largest number of pieces of one cycle's g(t).
pub const MAX_PIECES: usize = 4096;
/// Largest phase advance (rad) of the fastest rate over one piece.
const PIECE_RATE_TIMES_H: f64 = 1.0;

/// One piece of g(t): g(t0 + s h) = sum_n coef[n] s^n for s in [0, 1].
#[derive(Debug, Clone, PartialEq)]
pub struct Piece {
    /// Start within the cycle, s.
    pub t0: f64,
    /// Duration, s.
    pub h: f64,
    /// Monomial coefficients in s (empty: g = 0 on the piece).
    pub coef: Vec<f64>,
    /// Pieces with the same `group` share `h` (used to share work across pieces).
    pub group: usize,
}

impl Piece {
    #[inline]
    pub fn eval(&self, s: f64) -> f64 {
        self.coef.iter().rev().fold(0.0, |acc, &c| acc * s + c)
    }
}

/// g(t) over one cycle.
#[derive(Debug, Clone, PartialEq)]
pub struct SensitivityFunction {
    pub pieces: Vec<Piece>,
    pub cycle_s: f64,
    /// Number of distinct `group`s.
    pub groups: usize,
}

#[inline]
fn bilinear(l: &[f64; 3], r: &[f64; 3]) -> f64 {
    l[0] * r[1] - l[1] * r[0]
}

#[inline]
fn matvec(a: &[[f64; 3]; 3], x: &[f64; 3]) -> [f64; 3] {
    [
        a[0][0] * x[0] + a[0][1] * x[1] + a[0][2] * x[2],
        a[1][0] * x[0] + a[1][1] * x[1] + a[1][2] * x[2],
        a[2][0] * x[0] + a[2][1] * x[1] + a[2][2] * x[2],
    ]
}

#[inline]
fn matvec_neg_t(a: &[[f64; 3]; 3], x: &[f64; 3]) -> [f64; 3] {
    [
        -(a[0][0] * x[0] + a[1][0] * x[1] + a[2][0] * x[2]),
        -(a[0][1] * x[0] + a[1][1] * x[1] + a[2][1] * x[2]),
        -(a[0][2] * x[0] + a[1][2] * x[1] + a[2][2] * x[2]),
    ]
}

impl SensitivityFunction {
    /// g(t) of `probe` at laser detuning `nu_hz`. Errors when the pulses hold more Rabi
    /// cycles or lifetimes than [`MAX_PIECES`] pieces can represent.
    pub fn new(probe: &Probe, nu_hz: f64) -> Result<SensitivityFunction, InputError> {
        let gens = probe.generators(nu_hz);
        // Piece layout per step.
        let mut counts = Vec::with_capacity(gens.len());
        let mut total = 0usize;
        for (g, s) in gens.iter().zip(&probe.steps) {
            let n = if s.omega == 0.0 { 1 } else { (libm::ceil(g.rate() * s.duration_s / PIECE_RATE_TIMES_H) as usize).max(1) };
            let n = n.min(MAX_PIECES + 1);
            total += n;
            counts.push(n);
        }
        if total > MAX_PIECES {
            return Err(InputError::single(
                "sequence.segments",
                format!("{total}+ pieces"),
                format!("the pulses hold too many Rabi cycles or excited-state lifetimes to resolve g(t) (at most {MAX_PIECES} radians in all)"),
            ));
        }
        let props: Vec<Affine> = gens.iter().zip(&probe.steps).zip(&counts).map(|((g, s), &n)| g.propagator(s.duration_s / n as f64)).collect();
        // Forward: r at the start of every piece.
        let mut starts = Vec::with_capacity(total);
        let mut r = GROUND;
        for (p, &n) in props.iter().zip(&counts) {
            for _ in 0..n {
                starts.push(r);
                r = p.apply(r);
            }
        }
        // Backward: lambda at the start of every piece.
        let mut lam_starts = vec![[0.0; 3]; total];
        let mut lam = [0.0, 0.0, 1.0];
        let mut idx = total;
        for (p, &n) in props.iter().zip(&counts).rev() {
            for _ in 0..n {
                idx -= 1;
                lam = p.apply_transpose(lam);
                lam_starts[idx] = lam;
            }
        }
        let mut pieces = Vec::with_capacity(total + 2);
        if probe.start_s > 0.0 {
            pieces.push(Piece { t0: 0.0, h: probe.start_s, coef: Vec::new(), group: 0 });
        }
        let mut t = probe.start_s;
        let mut k = 0;
        let mut group = 1;
        for ((g, s), &n) in gens.iter().zip(&probe.steps).zip(&counts) {
            let h = s.duration_s / n as f64;
            for _ in 0..n {
                let (r0, l0) = (starts[k], lam_starts[k]);
                let coef = if s.omega == 0.0 {
                    vec![bilinear(&l0, &r0)]
                } else {
                    taylor(&g.a, g.gamma, h, r0, l0)
                };
                pieces.push(Piece { t0: t, h, coef, group });
                t += h;
                k += 1;
            }
            group += 1;
        }
        let end = probe.cycle_s - t;
        if end > 1e-12 * probe.cycle_s {
            pieces.push(Piece { t0: t, h: end, coef: Vec::new(), group: 0 });
        }
        // Sign convention: mean of g positive.
        let mean: f64 = pieces.iter().map(|p| p.h * p.coef.iter().enumerate().map(|(n, c)| c / (n + 1) as f64).sum::<f64>()).sum();
        if mean < 0.0 {
            for p in &mut pieces {
                for c in &mut p.coef {
                    *c = -*c;
                }
            }
        }
        Ok(SensitivityFunction { pieces, cycle_s: probe.cycle_s, groups: group })
    }

    /// g at time `t` within the cycle (0 <= t < cycle).
    pub fn at(&self, t: f64) -> f64 {
        let i = self.pieces.partition_point(|p| p.t0 <= t).saturating_sub(1);
        let p = &self.pieces[i];
        p.eval(((t - p.t0) / p.h).clamp(0.0, 1.0))
    }

    /// integral of g over the cycle, s.
    pub fn integral(&self) -> f64 {
        self.pieces.iter().map(|p| p.h * p.coef.iter().enumerate().map(|(n, c)| c / (n + 1) as f64).sum::<f64>()).sum()
    }

    /// g0 = (1/T_c) integral of g.
    pub fn g0(&self) -> f64 {
        self.integral() / self.cycle_s
    }

    /// Largest |g| over the cycle: nine samples per piece, then golden-section refinement
    /// around the best sample of each piece that comes within 1% of the largest sample.
    pub fn max_abs(&self) -> f64 {
        let mut per_piece: Vec<(f64, usize, usize)> = Vec::new();
        for (i, p) in self.pieces.iter().enumerate() {
            let (v, j) = (0..=8).map(|j| (p.eval(j as f64 / 8.0).abs(), j)).fold((0.0, 0), |a, b| if b.0 > a.0 { b } else { a });
            if v > 0.0 {
                per_piece.push((v, i, j));
            }
        }
        let best = per_piece.iter().map(|x| x.0).fold(0.0, f64::max);
        per_piece.retain(|x| x.0 >= 0.99 * best);
        per_piece.sort_by(|a, b| b.0.partial_cmp(&a.0).unwrap_or(std::cmp::Ordering::Equal));
        per_piece.truncate(32);
        let mut out = best;
        for &(_, i, j) in &per_piece {
            let p = &self.pieces[i];
            let f = |s: f64| p.eval(s).abs();
            let (mut a, mut b) = (((j as f64 - 1.0) / 8.0).max(0.0), ((j as f64 + 1.0) / 8.0).min(1.0));
            let r = 0.618_033_988_749_894_8;
            let (mut c, mut d) = (b - r * (b - a), a + r * (b - a));
            let (mut fc, mut fd) = (f(c), f(d));
            for _ in 0..60 {
                if fc > fd {
                    b = d;
                    d = c;
                    fd = fc;
                    c = b - r * (b - a);
                    fc = f(c);
                } else {
                    a = c;
                    c = d;
                    fc = fd;
                    d = a + r * (b - a);
                    fd = f(d);
                }
            }
            out = out.max(f((a + b) / 2.0));
        }
        out
    }
}

/// Taylor coefficients of g(t0 + s h) in s, from exact derivatives of r and lambda.
fn taylor(a: &[[f64; 3]; 3], gamma: f64, h: f64, r0: [f64; 3], l0: [f64; 3]) -> Vec<f64> {
    let mut rk = [[0.0; 3]; DEGREE + 1];
    let mut lk = [[0.0; 3]; DEGREE + 1];
    rk[0] = r0;
    lk[0] = l0;
    let ar = matvec(a, &r0);
    rk[1] = [h * ar[0], h * ar[1], h * (ar[2] - gamma)];
    for k in 2..=DEGREE {
        let v = matvec(a, &rk[k - 1]);
        let f = h / k as f64;
        rk[k] = [f * v[0], f * v[1], f * v[2]];
    }
    for k in 1..=DEGREE {
        let v = matvec_neg_t(a, &lk[k - 1]);
        let f = h / k as f64;
        lk[k] = [f * v[0], f * v[1], f * v[2]];
    }
    (0..=DEGREE).map(|n| (0..=n).map(|k| bilinear(&lk[n - k], &rk[k])).sum()).collect()
}
