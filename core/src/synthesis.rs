//! Seeded, reproducible synthesis of power-law frequency noise
//! S_y(f) = sum_a h_a f^a, a in {-2, -1, 0, 1, 2}, sampled every `tau0_s` seconds.
//!
//! # Method
//!
//! Each term is made by the discrete fractional-differencing filter of
//! "Discrete simulation of colored noise and stochastic processes and 1/f^alpha power law
//! noise generation", Proc. IEEE 83, 802 (1995): white Gaussian innovations w_n of
//! variance sigma^2 pass through the causal filter (1 - z^-1)^(a/2), whose impulse response
//! is g_0 = 1, g_k = g_(k-1) (k - 1 - a/2) / k, truncated to the record length:
//!
//! y_n = sum_(k=0..n) g_k w_(n-k),  n = 0 .. N-1.
//!
//! For a = 0, -2 and 2 the filter is finite or a running sum (g = 1; g = 1, 1, 1, ...;
//! g = 1, -1) and is applied directly; for a = +-1 (flicker) the convolution is done by a
//! radix-2 FFT of this module (twiddle factors from `libm`, so the bits are the same on every
//! platform; no fused multiply-add is used).
//!
//! # Normalisation (one-sided convention, IEEE Std 1139-2008)
//!
//! The one-sided spectral density of the discrete series is
//! S_y(f) = 2 sigma^2 tau0 |2 sin(pi f tau0)|^a on 0 < f <= 1/(2 tau0),
//! which tends to 2 sigma^2 tau0 (2 pi tau0)^a f^a for f << 1/tau0. The innovation variance
//! is chosen so that this low-frequency asymptote is h_a f^a:
//! sigma^2 = h_a / (2 tau0 (2 pi tau0)^a) (see [`innovation_variance`]).
//! With it the Allan variance of the series follows the IEEE Std 1139-2008 forms: white FM
//! h0/(2 tau) and white PM 3 f_h h2 / (4 pi^2 tau^2) with f_h = 1/(2 tau0) exactly (for every
//! averaging factor); random-walk FM (2 pi^2/3) h_-2 tau (1 + 1/(2 m^2)); flicker FM
//! 2 ln 2 h_-1 up to a relative O(ln m / m^2); flicker PM (1.038 + 3 ln(2 pi f_h tau)) h_1 /
//! (4 pi^2 tau^2) with the equivalent cut-off f_h = 2/(pi tau0) of
//! [`flicker_pm_equivalent_cutoff_hz`] (the discrete spectrum rises above the power law near
//! the Nyquist frequency). The tests check all of these on synthesised data.
//!
//! # Random numbers
//!
//! xoshiro256** (ACM Trans. Math. Softw. 47, 36 (2021)) seeded by SplitMix64, with
//! Gaussian pairs from pairs of uniforms by the transform of Ann. Math. Stat. 29, 610
//! (1958) through `libm`. Each noise term draws from
//! its own stream, derived from the seed and the exponent a, so a term's samples do not
//! depend on which other terms are present.

use crate::error::{show, Checker, InputError};
use num_complex::Complex64;
use serde::{Deserialize, Serialize};
use std::f64::consts::PI;

/// Largest number of points that may be synthesised (800 MB of output at 8 bytes a point).
pub const MAX_POINTS: u64 = 100_000_000;
/// Largest number of points when a flicker term (a = +-1) is present: its FFT buffer holds
/// 2 next_pow2(2N - 1) complex numbers' worth of bytes, 512 MiB at this cap, within the 4 GiB
/// address space of wasm32.
pub const MAX_POINTS_FLICKER: u64 = 1 << 24;
/// Largest sample interval accepted, seconds (about 30 years).
pub const MAX_TAU0_S: f64 = 1e9;

/// One power-law term of the one-sided fractional-frequency spectrum, S_y(f) = h f^alpha.
///
/// `alpha` is one of -2 (random-walk FM), -1 (flicker FM), 0 (white FM), 1 (flicker PM),
/// 2 (white PM); `h` is in Hz^(-1-alpha) and must be finite and non-negative.
///
/// ```
/// use clockwright_core::synthesis::PowerLaw;
/// let white_fm = PowerLaw { alpha: 0, h: 2e-26 }; // sigma_y(1 s) = 1e-13
/// assert_eq!(white_fm.alpha, 0);
/// ```
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct PowerLaw {
    pub alpha: i32,
    pub h: f64,
}

/// What to synthesise: `points` samples of fractional frequency y at interval `tau0_s`
/// seconds, from `seed`, with spectrum sum of `terms` (each exponent at most once).
///
/// ```
/// use clockwright_core::synthesis::{PowerLaw, Spec};
/// let spec = Spec { tau0_s: 1.0, points: 1000, seed: 7, terms: vec![PowerLaw { alpha: -1, h: 1e-30 }] };
/// assert_eq!(spec.points, 1000);
/// ```
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Spec {
    pub tau0_s: f64,
    pub points: u64,
    pub seed: u64,
    pub terms: Vec<PowerLaw>,
}

/// SplitMix64 step ("Fast splittable pseudorandom number generators", Proc. ACM OOPSLA
/// 2014): used to seed the generator.
fn splitmix64(state: &mut u64) -> u64 {
    *state = state.wrapping_add(0x9E37_79B9_7F4A_7C15);
    let mut z = *state;
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

/// xoshiro256** generator with Box-Muller Gaussian deviates; the same bits on every platform.
///
/// ```
/// use clockwright_core::synthesis::Rng;
/// let mut a = Rng::new(42);
/// let mut b = Rng::new(42);
/// assert_eq!(a.next_u64(), b.next_u64());
/// let u = a.uniform();
/// assert!(u >= 0.0 && u < 1.0);
/// ```
#[derive(Debug, Clone)]
pub struct Rng {
    s: [u64; 4],
    spare: Option<f64>,
}

impl Rng {
    /// A generator whose 256-bit state is four SplitMix64 outputs from `seed`.
    pub fn new(seed: u64) -> Self {
        let mut sm = seed;
        let s = [splitmix64(&mut sm), splitmix64(&mut sm), splitmix64(&mut sm), splitmix64(&mut sm)];
        Rng { s, spare: None }
    }

    /// A generator with this exact 256-bit state (not all zero; an all-zero state is
    /// replaced by the state of `Rng::new(0)`).
    ///
    /// ```
    /// use clockwright_core::synthesis::Rng;
    /// assert_eq!(Rng::from_state([1, 2, 3, 4]).state(), [1, 2, 3, 4]);
    /// ```
    pub fn from_state(s: [u64; 4]) -> Self {
        if s == [0; 4] {
            return Rng::new(0);
        }
        Rng { s, spare: None }
    }

    /// The current 256-bit state.
    pub fn state(&self) -> [u64; 4] {
        self.s
    }

    /// The next 64 random bits.
    pub fn next_u64(&mut self) -> u64 {
        let result = self.s[1].wrapping_mul(5).rotate_left(7).wrapping_mul(9);
        let t = self.s[1] << 17;
        self.s[2] ^= self.s[0];
        self.s[3] ^= self.s[1];
        self.s[1] ^= self.s[2];
        self.s[0] ^= self.s[3];
        self.s[2] ^= t;
        self.s[3] = self.s[3].rotate_left(45);
        result
    }

    /// Uniform on [0, 1) with 53 random bits.
    pub fn uniform(&mut self) -> f64 {
        (self.next_u64() >> 11) as f64 * (1.0 / (1u64 << 53) as f64)
    }

    /// Standard normal deviate (Box-Muller; the second of each pair is kept for the next call).
    pub fn gaussian(&mut self) -> f64 {
        if let Some(z) = self.spare.take() {
            return z;
        }
        // u1 in (0, 1]: never log(0).
        let u1 = ((self.next_u64() >> 11) + 1) as f64 * (1.0 / (1u64 << 53) as f64);
        let u2 = self.uniform();
        let r = libm::sqrt(-2.0 * libm::log(u1));
        let theta = 2.0 * PI * u2;
        self.spare = Some(r * libm::sin(theta));
        r * libm::cos(theta)
    }
}

fn check_alpha(c: &mut Checker, path: &str, alpha: i32) -> bool {
    if (-2..=2).contains(&alpha) {
        true
    } else {
        c.push(path, alpha.to_string(), "must be an integer from -2 to 2 (the exponent a of h_a f^a)");
        false
    }
}

/// The seed of the innovation stream of the term with exponent `alpha`.
fn stream_seed(seed: u64, alpha: i32) -> u64 {
    let mut s = seed ^ ((alpha + 3) as u64).wrapping_mul(0xD1B5_4A32_D192_ED03);
    splitmix64(&mut s)
}

/// The `n` unit-variance Gaussian innovations that [`synthesize`] uses for the term with
/// exponent `alpha` (-2..=2) and `seed`; exposed so that the filter can be checked.
///
/// ```
/// use clockwright_core::synthesis::innovations;
/// let w = innovations(1, 0, 4).unwrap();
/// assert_eq!(w, innovations(1, 0, 4).unwrap());
/// assert_ne!(w, innovations(1, -1, 4).unwrap());
/// ```
pub fn innovations(seed: u64, alpha: i32, n: u64) -> Result<Vec<f64>, InputError> {
    let mut c = Checker::new();
    check_alpha(&mut c, "alpha", alpha);
    check_points(&mut c, "points", n, MAX_POINTS);
    c.finish()?;
    let mut rng = Rng::new(stream_seed(seed, alpha));
    Ok((0..n).map(|_| rng.gaussian()).collect())
}

fn check_points(c: &mut Checker, path: &str, n: u64, max: u64) -> bool {
    if n < 1 || n > max {
        c.push(path, n.to_string(), format!("must be a whole number from 1 to {max}"));
        false
    } else {
        true
    }
}

/// Innovation variance sigma^2 (dimensionless, of y) for the term h f^alpha at sample
/// interval `tau0_s`: h / (2 tau0 (2 pi tau0)^alpha), so that the series' one-sided S_y(f)
/// tends to h f^alpha at low frequency.
///
/// ```
/// use clockwright_core::synthesis::innovation_variance;
/// // White FM: sigma^2 = h0 / (2 tau0), so that sigma_y^2(tau0) = h0 / (2 tau0).
/// let v = innovation_variance(0, 2e-26, 1.0).unwrap();
/// assert!((v - 1e-26).abs() < 1e-40);
/// ```
pub fn innovation_variance(alpha: i32, h: f64, tau0_s: f64) -> Result<f64, InputError> {
    let mut c = Checker::new();
    check_alpha(&mut c, "alpha", alpha);
    c.range("h", h, 0.0, f64::MAX, "");
    c.above("tau0_s", tau0_s, 0.0, MAX_TAU0_S, "s");
    c.finish()?;
    let w = 2.0 * PI * tau0_s;
    let scale = match alpha {
        -2 => w * w,
        -1 => w,
        0 => 1.0,
        1 => 1.0 / w,
        _ => 1.0 / (w * w),
    };
    let v = h * scale / (2.0 * tau0_s);
    if v.is_finite() {
        Ok(v)
    } else {
        Err(InputError::single("h", show(h), "gives an innovation variance beyond the double range; use a smaller h or another tau0_s"))
    }
}

/// The first `n` coefficients of the fractional-differencing filter (1 - z^-1)^(alpha/2), which turns white
/// noise into noise with S_y proportional to f^alpha: g_0 = 1, g_k = g_(k-1)(k - 1 - alpha/2)/k.
///
/// ```
/// use clockwright_core::synthesis::kasdin_coefficients;
/// assert_eq!(kasdin_coefficients(-2, 4).unwrap(), vec![1.0, 1.0, 1.0, 1.0]); // running sum
/// assert_eq!(kasdin_coefficients(2, 3).unwrap(), vec![1.0, -1.0, 0.0]);     // difference
/// assert_eq!(kasdin_coefficients(-1, 3).unwrap(), vec![1.0, 0.5, 0.375]);
/// ```
pub fn kasdin_coefficients(alpha: i32, n: u64) -> Result<Vec<f64>, InputError> {
    let mut c = Checker::new();
    check_alpha(&mut c, "alpha", alpha);
    check_points(&mut c, "n", n, MAX_POINTS);
    c.finish()?;
    let half = alpha as f64 / 2.0;
    let mut g = Vec::with_capacity(n as usize);
    let mut last = 1.0;
    g.push(last);
    for k in 1..n {
        let kf = k as f64;
        last *= (kf - 1.0 - half) / kf;
        g.push(last);
    }
    Ok(g)
}

/// FFT twiddles exp(-2 pi i k / len) for 0 <= k < len/2, from a two-level table
/// (coarse times fine) so that memory is O(sqrt(len)) and every factor comes from `libm`.
struct Twiddles {
    len: usize,
    shift: u32,
    fine: Vec<Complex64>,
    coarse: Vec<Complex64>,
}

impl Twiddles {
    fn new(len: usize) -> Self {
        let bits = len.trailing_zeros();
        let shift = bits.div_ceil(2);
        let fine_n = 1usize << shift;
        let coarse_n = (len >> shift).max(1);
        let at = |k: usize| {
            let th = -2.0 * PI * k as f64 / len as f64;
            Complex64::new(libm::cos(th), libm::sin(th))
        };
        let fine = (0..fine_n).map(at).collect();
        let coarse = (0..coarse_n).map(|j| at(j << shift)).collect();
        Twiddles { len, shift, fine, coarse }
    }
    #[inline]
    fn get(&self, k: usize) -> Complex64 {
        let mask = (1usize << self.shift) - 1;
        let hi = self.coarse[k >> self.shift];
        let lo = self.fine[k & mask];
        if k & mask == 0 {
            hi
        } else if k >> self.shift == 0 {
            lo
        } else {
            hi * lo
        }
    }
}

/// In-place radix-2 FFT (forward: exp(-2 pi i jk/L); inverse unscaled with +), L a power of 2.
fn fft_in_place(a: &mut [Complex64], tw: &Twiddles, inverse: bool) {
    let n = a.len();
    debug_assert!(n.is_power_of_two() && n == tw.len);
    if n < 2 {
        return;
    }
    // Bit reversal.
    let bits = n.trailing_zeros();
    for i in 0..n {
        let j = i.reverse_bits() >> (usize::BITS - bits);
        if j > i {
            a.swap(i, j);
        }
    }
    let conj = |w: Complex64| if inverse { w.conj() } else { w };
    let mut half = 1usize;
    // Small stages: stage twiddles precomputed (at most SMALL of them), block-major order.
    const SMALL: usize = 4096;
    let mut stage_w: Vec<Complex64> = Vec::with_capacity(SMALL.min(n / 2));
    while half < n {
        let stride = n / (2 * half);
        if half <= SMALL {
            stage_w.clear();
            stage_w.extend((0..half).map(|j| conj(tw.get(j * stride))));
            for block in a.chunks_exact_mut(2 * half) {
                let (lo, hi) = block.split_at_mut(half);
                for j in 0..half {
                    let t = hi[j] * stage_w[j];
                    hi[j] = lo[j] - t;
                    lo[j] += t;
                }
            }
        } else {
            for block in a.chunks_exact_mut(2 * half) {
                let (lo, hi) = block.split_at_mut(half);
                for j in 0..half {
                    let t = hi[j] * conj(tw.get(j * stride));
                    hi[j] = lo[j] - t;
                    lo[j] += t;
                }
            }
        }
        half *= 2;
    }
}

/// The first `n` terms of the linear convolution of `a` and `b` (c_j = sum_k a_k b_(j-k)),
/// by one complex FFT of both real sequences packed as a + i b and one inverse FFT.
/// Rounding is about 1e-16 log2(L) times sqrt(sum a^2 sum b^2).
///
/// ```
/// use clockwright_core::synthesis::convolve_prefix;
/// let c = convolve_prefix(&[1.0, 2.0, 3.0], &[1.0, 1.0], 4).unwrap();
/// let want = [1.0, 3.0, 5.0, 3.0];
/// for (x, y) in c.iter().zip(want) { assert!((x - y).abs() < 1e-12); }
/// ```
pub fn convolve_prefix(a: &[f64], b: &[f64], n: usize) -> Result<Vec<f64>, InputError> {
    let mut c = Checker::new();
    let cap = MAX_POINTS_FLICKER as usize;
    if a.is_empty() || a.len() > cap {
        c.push("a", format!("{} values", a.len()), format!("must have from 1 to {cap} values"));
    }
    if b.is_empty() || b.len() > cap {
        c.push("b", format!("{} values", b.len()), format!("must have from 1 to {cap} values"));
    }
    if n < 1 || n > cap {
        c.push("n", n.to_string(), format!("must be from 1 to {cap}"));
    }
    if let Some(i) = a.iter().position(|v| !v.is_finite()) {
        c.push(format!("a[{i}]"), show(a[i]), "must be finite");
    }
    if let Some(i) = b.iter().position(|v| !v.is_finite()) {
        c.push(format!("b[{i}]"), show(b[i]), "must be finite");
    }
    c.finish()?;
    let na = a.len().min(n);
    let nb = b.len().min(n);
    let len = (na + nb - 1).max(n).next_power_of_two().max(2);
    let mut z = vec![Complex64::new(0.0, 0.0); len];
    for (k, v) in a[..na].iter().enumerate() {
        z[k].re = *v;
    }
    for (k, v) in b[..nb].iter().enumerate() {
        z[k].im = *v;
    }
    let tw = Twiddles::new(len);
    fft_in_place(&mut z, &tw, false);
    // Separate the two spectra and multiply: A_k = (Z_k + conj Z_-k)/2, B_k = (Z_k - conj Z_-k)/(2i).
    let prod = |zk: Complex64, zmk: Complex64| {
        let ak = (zk + zmk.conj()) * 0.5;
        let bk = (zk - zmk.conj()) * Complex64::new(0.0, -0.5);
        ak * bk
    };
    for k in 0..=len / 2 {
        let mk = (len - k) % len;
        let (zk, zmk) = (z[k], z[mk]);
        z[k] = prod(zk, zmk);
        if mk != k {
            z[mk] = prod(zmk, zk);
        }
    }
    fft_in_place(&mut z, &tw, true);
    let scale = 1.0 / len as f64;
    Ok(z[..n].iter().map(|v| v.re * scale).collect())
}

/// Checks a spec; returns the sorted terms.
fn check_spec(spec: &Spec) -> Result<(), InputError> {
    let mut c = Checker::new();
    c.above("tau0_s", spec.tau0_s, 0.0, MAX_TAU0_S, "s");
    let flicker = spec.terms.iter().any(|t| t.alpha == 1 || t.alpha == -1);
    let cap = if flicker { MAX_POINTS_FLICKER } else { MAX_POINTS };
    if spec.points < 2 || spec.points > cap {
        let why = if flicker { " when a flicker term (alpha +-1) is present" } else { "" };
        c.push("points", spec.points.to_string(), format!("must be a whole number from 2 to {cap}{why}"));
    }
    if spec.terms.is_empty() {
        c.push("terms", "none", "must list at least one power-law term");
    }
    if spec.terms.len() > 5 {
        c.push("terms", format!("{} terms", spec.terms.len()), "at most 5 terms (one per exponent -2..2)");
    }
    for (i, t) in spec.terms.iter().enumerate().take(5) {
        check_alpha(&mut c, &format!("terms[{i}].alpha"), t.alpha);
        c.range(&format!("terms[{i}].h"), t.h, 0.0, f64::MAX, "");
        if spec.terms[..i].iter().any(|u| u.alpha == t.alpha) {
            c.push(format!("terms[{i}].alpha"), t.alpha.to_string(), "each exponent may appear once; add the h values instead");
        }
    }
    c.finish()
}

/// Synthesises `spec.points` fractional-frequency values (dimensionless) with one-sided
/// spectrum S_y(f) = sum h_a f^a at low frequency, by the fractional-differencing method (module docs);
/// deterministic for a given spec on every platform.
///
/// ```
/// use clockwright_core::synthesis::{synthesize, PowerLaw, Spec};
/// let spec = Spec { tau0_s: 1.0, points: 4096, seed: 3, terms: vec![PowerLaw { alpha: 0, h: 2.0 }] };
/// let y = synthesize(&spec).unwrap();
/// assert_eq!(y, synthesize(&spec).unwrap());
/// // White FM: variance h0 / (2 tau0) = 1.
/// let var = y.iter().map(|v| v * v).sum::<f64>() / y.len() as f64;
/// assert!((var - 1.0).abs() < 0.1);
/// ```
pub fn synthesize(spec: &Spec) -> Result<Vec<f64>, InputError> {
    check_spec(spec)?;
    let n = spec.points as usize;
    let mut y = vec![0.0; n];
    for (i, t) in spec.terms.iter().enumerate() {
        if t.h == 0.0 {
            continue;
        }
        let var = innovation_variance(t.alpha, t.h, spec.tau0_s).map_err(|e| prefix(e, &format!("terms[{i}]")))?;
        let sigma = libm::sqrt(var);
        let w = innovations(spec.seed, t.alpha, spec.points)?;
        let part: Vec<f64> = match t.alpha {
            0 => w,
            -2 => {
                let mut s = 0.0;
                w.iter()
                    .map(|v| {
                        s += v;
                        s
                    })
                    .collect()
            }
            2 => (0..n).map(|k| if k == 0 { w[0] } else { w[k] - w[k - 1] }).collect(),
            a => {
                let g = kasdin_coefficients(a, spec.points)?;
                convolve_prefix(&w, &g, n)?
            }
        };
        for (acc, v) in y.iter_mut().zip(part) {
            *acc += sigma * v;
        }
    }
    if let Some(k) = y.iter().position(|v| !v.is_finite()) {
        return Err(InputError::single("terms", format!("sample {k} overflows"), "use smaller h values"));
    }
    Ok(y)
}

fn prefix(mut e: InputError, p: &str) -> InputError {
    for q in &mut e.problems {
        q.path = format!("{p}.{}", q.path);
    }
    e
}

/// Equivalent sharp cut-off (Hz) of synthesised flicker PM for the IEEE Std 1139-2008 form
/// sigma_y^2 = (1.038 + 3 ln(2 pi f_h tau)) h_1 / (4 pi^2 tau^2): 2 / (pi tau0).
///
/// Derivation: the discrete spectrum 2 sigma^2 tau0 |2 sin(pi f tau0)| exceeds h_1 f near
/// Nyquist; the Allan integral picks up (3/8) int_0^(pi/2) (1/sin u - 1/u) du = (3/8) ln(4/pi)
/// more than the sharp cut-off at 1/(2 tau0), i.e. f_h is larger by the factor 4/pi.
///
/// ```
/// use clockwright_core::synthesis::flicker_pm_equivalent_cutoff_hz;
/// let f = flicker_pm_equivalent_cutoff_hz(0.5).unwrap();
/// assert!((f - 4.0 / std::f64::consts::PI).abs() < 1e-15);
/// ```
pub fn flicker_pm_equivalent_cutoff_hz(tau0_s: f64) -> Result<f64, InputError> {
    let mut c = Checker::new();
    c.above("tau0_s", tau0_s, 0.0, MAX_TAU0_S, "s");
    c.finish()?;
    Ok(2.0 / (PI * tau0_s))
}

/// Largest averaging factor accepted by [`expected_variance`] (its quadrature uses 2 m
/// panels of 8 points).
pub const MAX_EXPECTED_M: u64 = 1_000_000;

use crate::allan::GL8;

/// Expected value of an estimator's variance (dimensionless) at averaging factor `m` for
/// the discrete process that [`synthesize`] makes from `terms` at `tau0_s` (stationary
/// limit: a long record, away from its start).
///
/// It integrates the exact discrete spectrum S_y(f) = 2 sigma^2 tau0 |2 sin u|^a
/// (u = pi f tau0, sigma^2 from [`innovation_variance`]) against the estimator's discrete
/// transfer function over 0 < u < pi/2 (u-form: variance = (2 sigma^2 / pi) times the
/// integral of |2 sin u|^a K(u) du):
/// Allan K = (2/m^2) sin^4(mu)/sin^2 u, modified Allan K = (2/m^4) sin^6(mu)/sin^4 u,
/// Hadamard K = (8/(3 m^2)) sin^6(mu)/sin^2 u (derived from the y-domain forms of the
/// estimators). Gauss-Legendre on 2m panels (one per quarter period of sin(mu)).
///
/// ```
/// use clockwright_core::estimate::Estimator;
/// use clockwright_core::synthesis::{expected_variance, PowerLaw};
/// // White FM: h0 / (2 tau) for every m.
/// let v = expected_variance(Estimator::Allan, &[PowerLaw { alpha: 0, h: 1.0 }], 1.0, 8).unwrap();
/// assert!((v - 1.0 / 16.0).abs() < 1e-12);
/// ```
pub fn expected_variance(estimator: crate::estimate::Estimator, terms: &[PowerLaw], tau0_s: f64, m: u64) -> Result<f64, InputError> {
    use crate::estimate::Estimator;
    let mut c = Checker::new();
    c.above("tau0_s", tau0_s, 0.0, MAX_TAU0_S, "s");
    if !(1..=MAX_EXPECTED_M).contains(&m) {
        c.push("m", m.to_string(), format!("must be from 1 to {MAX_EXPECTED_M}"));
    }
    if terms.is_empty() || terms.len() > 5 {
        c.push("terms", format!("{} terms", terms.len()), "must list from 1 to 5 power-law terms");
    }
    for (i, t) in terms.iter().enumerate().take(5) {
        check_alpha(&mut c, &format!("terms[{i}].alpha"), t.alpha);
        c.range(&format!("terms[{i}].h"), t.h, 0.0, f64::MAX, "");
    }
    c.finish()?;
    let mut sig = Vec::with_capacity(terms.len());
    for (i, t) in terms.iter().enumerate() {
        sig.push((t.alpha, innovation_variance(t.alpha, t.h, tau0_s).map_err(|e| prefix(e, &format!("terms[{i}]")))?));
    }
    let mf = m as f64;
    let kernel = |u: f64| {
        let (s, sm) = (libm::sin(u), libm::sin(mf * u));
        let (s2, sm2) = (s * s, sm * sm);
        match estimator {
            Estimator::Allan => 2.0 / (mf * mf) * sm2 * sm2 / s2,
            Estimator::ModifiedAllan => 2.0 / (mf * mf * mf * mf) * sm2 * sm2 * sm2 / (s2 * s2),
            Estimator::Hadamard => 8.0 / (3.0 * mf * mf) * sm2 * sm2 * sm2 / s2,
        }
    };
    let spectrum = |u: f64| {
        let two_s = 2.0 * libm::sin(u);
        sig.iter()
            .map(|&(a, v)| {
                let p = match a {
                    -2 => 1.0 / (two_s * two_s),
                    -1 => 1.0 / two_s,
                    0 => 1.0,
                    1 => two_s,
                    _ => two_s * two_s,
                };
                2.0 * v / PI * p
            })
            .sum::<f64>()
    };
    let panels = 2 * m;
    let width = PI / 2.0 / panels as f64;
    let mut total = 0.0;
    for k in 0..panels {
        let (a, b) = (k as f64 * width, (k + 1) as f64 * width);
        let (cm, h) = ((a + b) / 2.0, (b - a) / 2.0);
        for (x, w) in GL8 {
            let u = cm + x * h;
            total += w * h * spectrum(u) * kernel(u);
        }
    }
    if total.is_finite() {
        Ok(total.max(0.0))
    } else {
        Err(InputError::single("terms", "h values", "give a variance beyond the double range"))
    }
}
