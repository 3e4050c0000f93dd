//! The Dick effect: laser noise aliased by the periodic interrogation.
//!
//! sigma_y^2(tau) = (1/tau) sum_{m>=1} (|g_m|^2 / g_0^2) S_y(m / T_c)
//! (IEEE Trans. UFFC 45, 887 (1998)), with the complex Fourier
//! coefficients g_m = (1/T_c) integral_0^T_c g(t) exp(-2 pi i m t / T_c) dt, whose squared
//! magnitude equals (g_m^c)^2 + (g_m^s)^2 of the cosine/sine form.
//!
//! The harmonics are integrated in closed form on every polynomial piece of g(t). The
//! sum is not cut off at a fixed harmonic: two tail sums are known exactly from Parseval's
//! theorem, T0 = sum_{m>M} |g_m|^2 (from the integral of g^2) and T2 = sum_{m>M} |g_m|^2/m^2
//! (from the integral of the squared antiderivative of g - g0), and they bound the tail of
//! every power law m^a with -2 <= a <= 0 from both sides (Hoelder's inequality above,
//! monotonicity below); terms with a > 0 stop at the high cut-off and are bounded by
//! m_h^a T0. The estimate of the tail uses |g_m|^2 ~ m^-q fitted to T0 and T2, clipped to
//! the bounds, and the half-width of the bounds is reported as the truncation error.

use crate::noise::Spectrum;
use crate::sensitivity::{SensitivityFunction, DEGREE};
use num_complex::Complex64;
use std::f64::consts::PI;

/// Most harmonics summed one by one.
pub const MAX_HARMONICS: usize = 1 << 16;
/// Most harmonic-times-piece terms of one Dick sum (each harmonic costs one term per piece
/// of g(t)): a g(t) of many pieces stops earlier and takes the analytic tail with its
/// stated, larger bound, so one sum stays within about 30 ms (release build, one core).
/// Designs of the trade converge (relative bound 1e-6) within a few hundred harmonics of
/// a few dozen pieces; only pulses of many Rabi cycles under phase noise up to a far
/// cut-off reach this cap.
pub const MAX_PIECE_HARMONICS: usize = 1 << 19;
/// Relative truncation error at which the sum stops.
pub const TOLERANCE: f64 = 1e-6;
/// Relative rounding allowance of the Parseval integrals and the partial sums.
const ROUNDING: f64 = 1e-13;
/// Number of weights |g_m|^2/g_0^2 returned for display.
pub const WEIGHTS_SHOWN: usize = 64;

/// Result of the Dick sum.
#[derive(Debug, Clone, PartialEq)]
pub struct DickSum {
    /// D such that sigma_y^2(tau) = D / tau, 1/Hz... (s): the aliased noise is white with h0 = 2 D.
    pub variance_coefficient: f64,
    pub harmonics_summed: usize,
    pub truncation_bound_relative: f64,
    pub weights: Vec<f64>,
    pub g0: f64,
}

/// 1/i for i < 128 (RECIP[0] unused): the sums below multiply instead of dividing. Indices
/// stay under 2 (DEGREE + 3) + TAYLOR_TERMS and DEGREE + 62.
const RECIP: [f64; 128] = {
    let mut t = [0.0; 128];
    let mut i = 1;
    while i < 128 {
        t[i] = 1.0 / i as f64;
        i += 1;
    }
    t
};

/// Moments mu_n(theta) = integral_0^1 s^n exp(-i theta s) ds for n = 0..=nmax, with
/// `e` = exp(-i theta). Upward recurrence where it is stable (|theta| > nmax + 1),
/// downward recurrence from a far start otherwise (errors damp by |theta|/n per step).
fn moments(theta: f64, e: Complex64, nmax: usize, out: &mut [Complex64]) {
    let i_theta = Complex64::new(0.0, theta);
    if theta.abs() > nmax as f64 + 1.0 {
        out[0] = (Complex64::new(1.0, 0.0) - e) / i_theta;
        for n in 1..=nmax {
            out[n] = (out[n - 1] * n as f64 - e) / i_theta;
        }
    } else {
        // Start far enough above nmax that the start's error is damped below 1e-17.
        let mut big = nmax;
        let mut damp = 1.0;
        while damp > 1e-17 && big < nmax + 60 {
            big += 1;
            damp *= theta.abs() / big as f64;
        }
        let mut mu = e / Complex64::new(big as f64 + 1.0, -theta);
        for n in (1..=big).rev() {
            mu = (i_theta * mu + e) * RECIP[n];
            if n - 1 <= nmax {
                out[n - 1] = mu;
            }
        }
    }
}

/// Exact integrals over one cycle used by the tail bounds.
struct Parseval {
    g0: f64,
    /// sum_{m>=1} |g_m|^2
    s0: f64,
    /// sum_{m>=1} |g_m|^2 / m^2
    s2: f64,
    /// Rounding-error scales of s0 and s2 (both are differences of larger integrals).
    e0: f64,
    e2: f64,
}

fn parseval(gf: &SensitivityFunction) -> Parseval {
    let tc = gf.cycle_s;
    let mut c0 = 0.0;
    let mut g2 = 0.0;
    for p in &gf.pieces {
        let w = p.h / tc;
        for (n, a) in p.coef.iter().enumerate() {
            c0 += w * a * RECIP[n + 1];
            for (k, b) in p.coef.iter().enumerate() {
                g2 += w * a * b * RECIP[n + k + 1];
            }
        }
    }
    // Antiderivative H(u) of G - g0 in cycle units, piece by piece.
    let mut h_start = 0.0;
    let mut ih = 0.0;
    let mut ih2 = 0.0;
    let mut b = [0.0; DEGREE + 2];
    for p in &gf.pieces {
        let w = p.h / tc;
        let len = p.coef.len().max(1) + 1;
        b[..len].fill(0.0);
        b[0] = h_start;
        b[1] = -w * c0;
        for (n, a) in p.coef.iter().enumerate() {
            b[n + 1] += w * a * RECIP[n + 1];
        }
        for n in 0..len {
            ih += w * b[n] * RECIP[n + 1];
            for k in 0..len {
                ih2 += w * b[n] * b[k] * RECIP[n + k + 1];
            }
        }
        h_start = b[..len].iter().sum();
    }
    let k2 = 2.0 * PI * PI;
    Parseval {
        g0: c0,
        s0: ((g2 - c0 * c0) / 2.0).max(0.0),
        s2: (k2 * (ih2 - ih * ih)).max(0.0),
        e0: ROUNDING * g2,
        e2: ROUNDING * k2 * (ih2 + ih * ih),
    }
}

/// Largest phase theta = omega_m h across a piece for which the Taylor form is used.
const TAYLOR_THETA: f64 = 3.0;
/// Terms of the Taylor form: 3^31/31! < 1e-19, and the alternating sum loses at most a
/// factor exp(3) to cancellation.
const TAYLOR_TERMS: usize = 32;

/// integral_0^1 P(s) exp(-i theta s) ds = sum_k M_k (-i theta)^k / k! with the real
/// moments M_k = integral_0^1 s^k P(s) ds = sum_n a_n / (n + k + 1), split into the even
/// and odd powers of theta: Re = sum_j e_j x^j, Im = -theta sum_j o_j x^j, x = theta^2.
/// Used for |theta| <= TAYLOR_THETA, where it replaces a serial recurrence by two short
/// polynomials.
#[derive(Clone, Copy)]
struct TaylorForm {
    even: [f64; TAYLOR_TERMS / 2],
    odd: [f64; TAYLOR_TERMS / 2],
}

impl TaylorForm {
    fn new(coef: &[f64]) -> TaylorForm {
        let mut t = TaylorForm { even: [0.0; TAYLOR_TERMS / 2], odd: [0.0; TAYLOR_TERMS / 2] };
        let mut fact = 1.0;
        for k in 0..TAYLOR_TERMS {
            if k > 0 {
                fact *= k as f64;
            }
            let mk: f64 = coef.iter().enumerate().map(|(n, a)| a * RECIP[n + k + 1]).sum();
            let sign = if (k / 2) % 2 == 0 { 1.0 } else { -1.0 };
            if k % 2 == 0 {
                t.even[k / 2] = sign * mk / fact;
            } else {
                t.odd[k / 2] = sign * mk / fact;
            }
        }
        t
    }

    /// The integral at `theta`, summing the first `pairs` even and odd coefficients (see
    /// [`taylor_pairs`]). Each part is Horner in y = x^2 on its even- and odd-indexed
    /// coefficients, four short independent chains in all.
    #[inline]
    fn eval(&self, theta: f64, pairs: usize) -> Complex64 {
        let x = theta * theta;
        let y = x * x;
        let part = |c: &[f64]| -> f64 {
            let (mut a, mut b) = (0.0, 0.0);
            for i in (0..pairs).rev() {
                if i % 2 == 0 {
                    a = a * y + c[i];
                } else {
                    b = b * y + c[i];
                }
            }
            a + x * b
        };
        Complex64::new(part(&self.even), -theta * part(&self.odd))
    }

    /// [`TaylorForm::eval`] of four forms at one `theta`, the sixteen Horner chains
    /// interleaved; each value is bit for bit what `eval` gives.
    #[inline]
    fn eval4(forms: &[TaylorForm], theta: f64, pairs: usize) -> [Complex64; 4] {
        let x = theta * theta;
        let y = x * x;
        let (mut ea, mut eb, mut oa, mut ob) = ([0.0f64; 4], [0.0f64; 4], [0.0f64; 4], [0.0f64; 4]);
        for i in (0..pairs).rev() {
            if i % 2 == 0 {
                for q in 0..4 {
                    ea[q] = ea[q] * y + forms[q].even[i];
                    oa[q] = oa[q] * y + forms[q].odd[i];
                }
            } else {
                for q in 0..4 {
                    eb[q] = eb[q] * y + forms[q].even[i];
                    ob[q] = ob[q] * y + forms[q].odd[i];
                }
            }
        }
        std::array::from_fn(|q| Complex64::new(ea[q] + x * eb[q], -theta * (oa[q] + x * ob[q])))
    }
}

/// 1 / ((2j - 1) 2j) for j = 1..=TAYLOR_TERMS/2, so that theta^(2j)/(2j)! builds by products.
const TAYLOR_STEP: [f64; TAYLOR_TERMS / 2] = {
    let mut t = [0.0; TAYLOR_TERMS / 2];
    let mut j = 0;
    while j < TAYLOR_TERMS / 2 {
        let k = 2 * (j + 1);
        t[j] = 1.0 / ((k - 1) * k) as f64;
        j += 1;
    }
    t
};

/// Pairs of Taylor terms needed at `theta`: the first omitted term theta^(2j)/(2j)! (which
/// bounds the rest, the moments being at most max|P|) is under 1e-19.
#[inline]
fn taylor_pairs(theta: f64) -> usize {
    let x = theta * theta;
    let mut t = 1.0;
    for (j, s) in TAYLOR_STEP.iter().enumerate() {
        t *= x * s;
        if t < 1e-19 {
            return j + 1;
        }
    }
    TAYLOR_TERMS / 2
}

/// Incremental generator of g_1, g_2, ... .
struct Harmonics<'a> {
    gf: &'a SensitivityFunction,
    /// Per piece with g != 0: index, exp(-i w1 t0), current exp(-i wm t0).
    step_t0: Vec<Complex64>,
    cur_t0: Vec<Complex64>,
    /// Per group: exp(-i w1 h), current exp(-i wm h), h.
    step_h: Vec<Complex64>,
    cur_h: Vec<Complex64>,
    h_of: Vec<f64>,
    deg_of: Vec<usize>,
    active: Vec<usize>,
    m: usize,
    mu: Vec<Vec<Complex64>>,
    /// Per group, the Taylor terms used at the current harmonic (where theta is small).
    pairs_of: Vec<usize>,
    /// Per active piece, its integral at the current harmonic (scratch).
    vals: Vec<Complex64>,
    /// Per active piece, the Taylor form of its integral.
    taylor: Vec<TaylorForm>,
}

impl<'a> Harmonics<'a> {
    fn new(gf: &'a SensitivityFunction) -> Self {
        let w1 = 2.0 * PI / gf.cycle_s;
        let active: Vec<usize> = (0..gf.pieces.len()).filter(|&i| !gf.pieces[i].coef.is_empty()).collect();
        let step_t0 = active.iter().map(|&i| cis(-w1 * gf.pieces[i].t0)).collect();
        let cur_t0 = vec![Complex64::new(1.0, 0.0); active.len()];
        let mut h_of = vec![0.0; gf.groups + 1];
        let mut deg_of = vec![0usize; gf.groups + 1];
        for &i in &active {
            let p = &gf.pieces[i];
            h_of[p.group] = p.h;
            deg_of[p.group] = deg_of[p.group].max(p.coef.len() - 1);
        }
        let step_h = h_of.iter().map(|&h| cis(-w1 * h)).collect();
        let cur_h = vec![Complex64::new(1.0, 0.0); h_of.len()];
        let mu = vec![vec![Complex64::new(0.0, 0.0); DEGREE + 1]; h_of.len()];
        let taylor = active.iter().map(|&i| TaylorForm::new(&gf.pieces[i].coef)).collect();
        let pairs_of = vec![0; h_of.len()];
        let vals = vec![Complex64::new(0.0, 0.0); active.len()];
        Harmonics { gf, step_t0, cur_t0, step_h, cur_h, h_of, deg_of, active, m: 0, mu, pairs_of, vals, taylor }
    }

    /// Returns g_{m+1}.
    fn next(&mut self) -> Complex64 {
        self.m += 1;
        let m = self.m as f64;
        let w = 2.0 * PI * m / self.gf.cycle_s;
        // Re-anchor the running phasors now and then so rounding cannot accumulate.
        let exact = self.m % 4096 == 0;
        for (g, (cur, step)) in self.cur_h.iter_mut().zip(&self.step_h).enumerate() {
            *cur = if exact { cis(-w * self.h_of[g]) } else { *cur * step };
        }
        for (g, &h) in self.h_of.iter().enumerate() {
            if h > 0.0 && w * h > TAYLOR_THETA {
                let nmax = self.deg_of[g];
                moments(w * h, self.cur_h[g], nmax, &mut self.mu[g]);
            } else {
                // Every piece of a group has the group's h, so the same theta and the same
                // number of Taylor terms: found once here, not once per piece.
                self.pairs_of[g] = taylor_pairs(w * h);
            }
        }
        // The integral over each piece, four pieces of one group at a time where possible:
        // their Horner chains and sums run interleaved (independent, so the processor
        // overlaps them), each computed with exactly the operations it would take alone.
        let n = self.active.len();
        let mut k = 0;
        while k < n {
            let p = &self.gf.pieces[self.active[k]];
            let theta = w * p.h;
            let batch = k + 4 <= n
                && self.active[k + 1..k + 4].iter().all(|&j| {
                    let q = &self.gf.pieces[j];
                    q.group == p.group && q.coef.len() == p.coef.len()
                });
            if theta <= TAYLOR_THETA {
                let pairs = self.pairs_of[p.group];
                if batch {
                    let v = TaylorForm::eval4(&self.taylor[k..k + 4], theta, pairs);
                    self.vals[k..k + 4].copy_from_slice(&v);
                    k += 4;
                } else {
                    self.vals[k] = self.taylor[k].eval(theta, pairs);
                    k += 1;
                }
            } else {
                let mu = &self.mu[p.group];
                if batch {
                    let cs: [&[f64]; 4] = std::array::from_fn(|q| self.gf.pieces[self.active[k + q]].coef.as_slice());
                    let mut acc = [Complex64::new(0.0, 0.0); 4];
                    for (nn, m) in mu.iter().enumerate().take(p.coef.len()) {
                        for q in 0..4 {
                            acc[q] += *m * cs[q][nn];
                        }
                    }
                    self.vals[k..k + 4].copy_from_slice(&acc);
                    k += 4;
                } else {
                    let mut s = Complex64::new(0.0, 0.0);
                    for (nn, a) in p.coef.iter().enumerate() {
                        s += mu[nn] * *a;
                    }
                    self.vals[k] = s;
                    k += 1;
                }
            }
        }
        let mut c = Complex64::new(0.0, 0.0);
        for (k, &i) in self.active.iter().enumerate() {
            let p = &self.gf.pieces[i];
            self.cur_t0[k] = if exact { cis(-w * p.t0) } else { self.cur_t0[k] * self.step_t0[k] };
            c += self.cur_t0[k] * self.vals[k] * p.h;
        }
        c / self.gf.cycle_s
    }
}

/// g_1 ... g_m of `gf`, the complex Fourier coefficients.
pub fn fourier_coefficients(gf: &SensitivityFunction, m: usize) -> Vec<Complex64> {
    let mut h = Harmonics::new(gf);
    (0..m).map(|_| h.next()).collect()
}

/// Lower and upper bound and estimate of sum_{m>M} |g_m|^2 S_y(m/T_c).
/// `t0` and `t2` are the tail sums with their rounding allowances `e0`, `e2`.
fn tail(spec: &Spectrum, tc: f64, m_done: usize, (t0, e0): (f64, f64), (t2, e2): (f64, f64)) -> (f64, f64, f64) {
    let (t0_lo, t0_hi) = ((t0 - e0).max(0.0), t0 + e0);
    let (t2_lo, t2_hi) = ((t2 - e2).max(0.0), (t2 + e2).min(t0_hi));
    // max/min rather than clamp: with extreme inputs the sums can be NaN, which clamp
    // refuses with a panic; a NaN here is caught by the finite check of the result.
    let (t0, t2) = (t0.max(0.0), t2.max(0.0).min(t2_hi));
    if t0_hi <= 0.0 {
        return (0.0, 0.0, 0.0);
    }
    let mf = m_done as f64;
    let m_h = libm::floor(spec.f_high * tc);
    let (mut lo, mut hi) = (0.0, 0.0);
    for &(a, h) in &spec.terms {
        let k = h * libm::pow(tc, -a as f64);
        match a {
            // The white and random-walk tails are the Parseval sums themselves.
            0 => {
                lo += k * t0_lo;
                hi += k * t0_hi;
            }
            -2 => {
                lo += k * t2_lo;
                hi += k * t2_hi;
            }
            -1 => {
                hi += k * libm::sqrt(t0_hi * t2_hi);
                lo += k * (mf + 1.0) * t2_lo;
            }
            _ if mf < m_h => hi += k * libm::pow(m_h, a as f64) * t0_hi,
            _ => {}
        }
    }
    if let Some(tbl) = &spec.table {
        let f_lo = mf / tc;
        if f_lo < spec.f_high {
            // Largest table value above f_lo: at a node, at f_lo, or at the cut-off.
            let mut smax = spec.table_s_y(f_lo).max(spec.table_s_y(spec.f_high));
            for &lf in &tbl.ln_f {
                let f = libm::exp(lf);
                if f > f_lo && f <= spec.f_high {
                    smax = smax.max(spec.table_s_y(f));
                }
            }
            hi += smax * t0_hi;
        }
    }
    // Estimate: |g_m|^2 ~ K m^-q fitted to t0 and t2.
    let x0 = mf + 0.5;
    let r = if t0 > 0.0 { t2 / t0 * x0 * x0 } else { 0.0 };
    let est = if r > 0.0 && r < 1.0 {
        let q = ((1.0 + r) / (1.0 - r)).clamp(1.05, 12.0);
        let kq = t0 * (q - 1.0) * libm::pow(x0, q - 1.0);
        let mut s = 0.0;
        for &(a, h) in &spec.terms {
            let k = h * libm::pow(tc, -a as f64);
            let e = a as f64 - q + 1.0;
            let upper = if a <= 0 { f64::INFINITY } else { m_h + 0.5 };
            if upper <= x0 {
                continue;
            }
            let integral = if e.abs() < 1e-12 {
                libm::log(upper / x0)
            } else if upper.is_infinite() {
                if e < 0.0 { -libm::pow(x0, e) / e } else { 0.0 }
            } else {
                (libm::pow(upper, e) - libm::pow(x0, e)) / e
            };
            s += k * kq * integral;
        }
        if spec.table.is_some() && x0 < m_h + 0.5 {
            s += kq * log_quadrature(|x| libm::pow(x, -q) * spec.table_s_y(x / tc), x0, m_h + 0.5);
        }
        s
    } else {
        (lo + hi) / 2.0
    };
    (lo, hi, est.max(lo).min(hi.max(lo)))
}

/// integral_a^b f(x) dx on log-spaced panels with 8-point Gauss-Legendre each.
pub(crate) fn log_quadrature(f: impl Fn(f64) -> f64, a: f64, b: f64) -> f64 {
    if b <= a {
        return 0.0;
    }
    let (la, lb) = (libm::log(a), libm::log(b));
    let panels = (libm::ceil((lb - la) / 0.5) as usize).clamp(1, 200);
    let w = (lb - la) / panels as f64;
    let mut s = 0.0;
    for k in 0..panels {
        let c = la + (k as f64 + 0.5) * w;
        for (x, wt) in crate::allan::GL8 {
            let lx = c + x * w / 2.0;
            let xv = libm::exp(lx);
            s += wt * w / 2.0 * f(xv) * xv;
        }
    }
    s
}

/// The Dick variance coefficient of `gf` with the laser spectrum `spec`.
pub fn dick_sum(gf: &SensitivityFunction, spec: &Spectrum) -> DickSum {
    let tc = gf.cycle_s;
    let pv = parseval(gf);
    let g0 = pv.g0;
    let mut harm = Harmonics::new(gf);
    let (mut p0, mut p2, mut d) = (0.0, 0.0, 0.0);
    let mut weights = Vec::new();
    let mut m = 0usize;
    let mut checkpoint = 32usize;
    let mut bound = f64::INFINITY;
    let mut total = 0.0;
    let max_m = MAX_HARMONICS.min(MAX_PIECE_HARMONICS / gf.pieces.len().max(1)).max(32);
    while m < max_m {
        let c = harm.next();
        m += 1;
        let c2 = c.norm_sqr();
        if weights.len() < WEIGHTS_SHOWN {
            weights.push(c2 / (g0 * g0));
        }
        p0 += c2;
        p2 += c2 / (m as f64 * m as f64);
        d += c2 * spec.s_y(m as f64 / tc);
        if !d.is_finite() {
            // Beyond double precision (extreme noise levels): no later term can bring the
            // sum back, and the caller refuses a result that is not finite.
            total = d;
            break;
        }
        if m == checkpoint || m == max_m {
            let e0 = pv.e0 + ROUNDING * p0;
            let e2 = pv.e2 + ROUNDING * p2;
            let (lo, hi, est) = tail(spec, tc, m, (pv.s0 - p0, e0), (pv.s2 - p2, e2));
            total = d + est;
            let half = (hi - est).max(est - lo).max(0.0);
            bound = if total > 0.0 { half / total } else { 0.0 };
            if bound <= TOLERANCE {
                break;
            }
            checkpoint = checkpoint.saturating_mul(2);
        }
    }
    DickSum { variance_coefficient: total / (g0 * g0), harmonics_summed: m, truncation_bound_relative: bound, weights, g0 }
}

/// exp(i x) through libm, so native and wasm builds agree.
#[inline]
fn cis(x: f64) -> Complex64 {
    Complex64::new(libm::cos(x), libm::sin(x))
}
