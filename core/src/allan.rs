//! Allan and modified Allan deviation of a spectrum, by integration of the transfer
//! functions, and the IEEE Std 1139-2008 closed forms of the power laws.
//!
//! sigma_y^2(tau)     = 2 int_0^inf S_y(f) sin^4(pi f tau) / (pi f tau)^2 df
//!   (IEEE Trans. Instrum. Meas. IM-20, 105 (1971));
//! mod sigma_y^2(tau) = 2 int_0^inf S_y(f) sin^6(pi f tau) / (pi f tau)^4 df
//!   (continuous-averaging limit of the modified Allan variance).
//!
//! With u = pi f tau the integrals become (2/(pi tau)) int S(u/(pi tau)) K(u) du. The
//! oscillating range u < 8 pi is integrated on panels of a quarter period with 8-point
//! Gauss-Legendre; beyond it the kernel is replaced by its mean (3/8 for sin^4, 5/16 for
//! sin^6) on log-spaced panels, plus the leading boundary term of the oscillating part
//! (integration by parts: int_U^inf F(u) cos(k u) du = -F'(U)/k^2 + O(F''') at U = n pi),
//! and past the last spectral feature a power-law tail fitted to the integrand.

use std::f64::consts::{LN_2, PI};

/// 8-point Gauss-Legendre nodes and weights on [-1, 1].
pub const GL8: [(f64, f64); 8] = [
    (-0.960_289_856_497_536_2, 0.101_228_536_290_376_26),
    (-0.796_666_477_413_626_7, 0.222_381_034_453_374_47),
    (-0.525_532_409_916_329_0, 0.313_706_645_877_887_3),
    (-0.183_434_642_495_649_8, 0.362_683_783_378_362_0),
    (0.183_434_642_495_649_8, 0.362_683_783_378_362_0),
    (0.525_532_409_916_329_0, 0.313_706_645_877_887_3),
    (0.796_666_477_413_626_7, 0.222_381_034_453_374_47),
    (0.960_289_856_497_536_2, 0.101_228_536_290_376_26),
];

/// Which variance.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Variance {
    Allan,
    Modified,
}

impl Variance {
    /// The kernel at `u` from sin^2(u) (integrals sharing their nodes share the sine).
    #[inline]
    fn kernel_sin2(self, u: f64, s2: f64) -> f64 {
        if u < 1e-4 {
            // Small-u limits: sin^4 u/u^2 ~ u^2, sin^6 u/u^4 ~ u^2.
            return u * u;
        }
        match self {
            Variance::Allan => s2 * s2 / (u * u),
            Variance::Modified => s2 * s2 * s2 / (u * u * u * u),
        }
    }
    fn mean(self) -> f64 {
        match self {
            Variance::Allan => 3.0 / 8.0,
            Variance::Modified => 5.0 / 16.0,
        }
    }
    fn power(self) -> i32 {
        match self {
            Variance::Allan => 2,
            Variance::Modified => 4,
        }
    }
    /// sum_k c_k / k^2 over the cosine series of sin^4 (or sin^6), so that the oscillating
    /// remainder beyond U = n pi is F'(U) times this.
    fn boundary(self) -> f64 {
        match self {
            Variance::Allan => 0.5 / 4.0 - 0.125 / 16.0,
            Variance::Modified => (15.0 / 32.0) / 4.0 - (6.0 / 32.0) / 16.0 + (1.0 / 32.0) / 36.0,
        }
    }
}

/// Start of the averaged-kernel range, in u = pi f tau.
const U_SWITCH: f64 = 8.0 * PI;
/// Width of the log-spaced panels of the averaged range, in ln u.
const LOG_PANEL: f64 = 1.0;

/// The variance (not deviation) of spectrum `s` (S_y in 1/Hz as a function of f in Hz) at
/// averaging time `tau`. `features` are frequencies (Hz) where `s` has kinks or steps.
pub fn variance(s: &dyn Fn(f64) -> f64, tau: f64, which: Variance, features: &[f64]) -> f64 {
    variances(&|f| [s(f)], tau, [which], features)[0]
}

/// [`variance`] of `K` spectra at once, each with its own variance, on the same nodes: the
/// spectra are evaluated once per node (a table's interpolation, the sum of the terms), which
/// is most of the cost. Each result equals [`variance`] of its spectrum alone, bit for bit.
pub fn variances<const K: usize>(s: &dyn Fn(f64) -> [f64; K], tau: f64, which: [Variance; K], features: &[f64]) -> [f64; K] {
    let scale = PI * tau; // u = scale * f
    let f_of = |u: f64| u / scale;
    let mut feats: Vec<f64> = features.iter().map(|&f| f * scale).filter(|u| u.is_finite() && *u > 0.0).collect();
    feats.sort_by(|a, b| a.partial_cmp(b).unwrap_or(std::cmp::Ordering::Equal));
    let mut total = [0.0; K];
    // Oscillating range: panels of pi/2, split at features.
    let quarters = (U_SWITCH / (PI / 2.0)) as usize;
    let mut edges: Vec<f64> = (0..=quarters).map(|k| k as f64 * PI / 2.0).collect();
    edges.extend(feats.iter().copied().filter(|&u| u < U_SWITCH));
    // Below the first quarter period, geometric panels (factor 4) down to well under the
    // lowest feature, so that a corner at small u is resolved.
    if let Some(&lowest) = feats.first().filter(|&&u| u < PI / 2.0) {
        let mut u = PI / 8.0;
        while u > lowest * 1e-3 && edges.len() < 200 {
            edges.push(u);
            u /= 4.0;
        }
    }
    edges.sort_by(|a, b| a.partial_cmp(b).unwrap_or(std::cmp::Ordering::Equal));
    for w in edges.windows(2) {
        let (a, b) = (w[0], w[1]);
        if b - a <= 0.0 {
            continue;
        }
        let (c, h) = ((a + b) / 2.0, (b - a) / 2.0);
        for (x, wt) in GL8 {
            let u = c + x * h;
            let sv = s(f_of(u));
            let sn = if u < 1e-4 { 0.0 } else { libm::sin(u) };
            for k in 0..K {
                total[k] += wt * h * sv[k] * which[k].kernel_sin2(u, sn * sn);
            }
        }
    }
    // Averaged range on log panels up to well past the last feature.
    let big = feats.last().copied().unwrap_or(0.0).max(U_SWITCH);
    let u_end = big * 1e2;
    let mut ledges: Vec<f64> = Vec::new();
    let (l0, l1) = (libm::log(U_SWITCH), libm::log(u_end));
    let n = (libm::ceil((l1 - l0) / LOG_PANEL) as usize).clamp(1, 400);
    for k in 0..=n {
        ledges.push(l0 + (l1 - l0) * k as f64 / n as f64);
    }
    ledges.extend(feats.iter().filter(|&&u| u > U_SWITCH && u < u_end).map(|&u| libm::log(u)));
    ledges.sort_by(|a, b| a.partial_cmp(b).unwrap_or(std::cmp::Ordering::Equal));
    let f_avg = |u: f64| {
        let sv = s(f_of(u));
        let mut out = [0.0; K];
        for k in 0..K {
            out[k] = sv[k] / crate::noise::powi(u, which[k].power());
        }
        out
    };
    for w in ledges.windows(2) {
        let (a, b) = (w[0], w[1]);
        if b - a <= 0.0 {
            continue;
        }
        let (c, h) = ((a + b) / 2.0, (b - a) / 2.0);
        for (x, wt) in GL8 {
            let u = libm::exp(c + x * h);
            let fa = f_avg(u);
            for k in 0..K {
                total[k] += wt * h * which[k].mean() * fa[k] * u;
            }
        }
    }
    // Power-law tail beyond u_end.
    let (fa, fb) = (f_avg(u_end / 2.0), f_avg(u_end));
    for k in 0..K {
        if fa[k] > 0.0 && fb[k] > 0.0 {
            let slope = libm::log(fb[k] / fa[k]) / LN_2;
            if slope < -1.0 {
                total[k] += which[k].mean() * fb[k] * u_end / (-(slope + 1.0));
            }
        }
    }
    // Boundary term of the oscillating part at U_SWITCH (a multiple of pi).
    let du = 1e-3 * U_SWITCH;
    let (fp, fm) = (f_avg(U_SWITCH + du), f_avg(U_SWITCH - du));
    let mut out = [0.0; K];
    for k in 0..K {
        let deriv = (fp[k] - fm[k]) / (2.0 * du);
        total[k] += which[k].boundary() * deriv;
        out[k] = (2.0 / scale) * total[k].max(0.0);
    }
    out
}

/// IEEE Std 1139-2008 closed form of the Allan variance of one power-law term
/// S_y = h f^alpha with high cut-off `f_h` (used for alpha >= 1), at `tau`.
pub fn allan_variance_power_law(alpha: i32, h: f64, tau: f64, f_h: f64) -> f64 {
    match alpha {
        2 => 3.0 * f_h * h / (4.0 * PI * PI * tau * tau),
        1 => (1.038 + 3.0 * libm::log(2.0 * PI * f_h * tau)) * h / (4.0 * PI * PI * tau * tau),
        0 => h / (2.0 * tau),
        -1 => 2.0 * LN_2 * h,
        -2 => 2.0 * PI * PI / 3.0 * h * tau,
        _ => f64::NAN,
    }
}

/// Allan variance of white frequency noise h0 seen through a first-order low-pass of time
/// constant `t_c` (S_y = h0 / (1 + (2 pi f t_c)^2)): exact, from the exponential
/// autocorrelation R(t) = h0/(4 t_c) exp(-|t|/t_c) and
/// sigma^2 = (4 D(tau) - D(2 tau)) / (2 tau^2), D(t) = 2 int_0^t (t - s) R(s) ds.
pub fn allan_variance_lowpass_white(h0: f64, tau: f64, t_c: f64) -> f64 {
    if t_c <= 0.0 {
        return h0 / (2.0 * tau);
    }
    let x = tau / t_c;
    if x < 1e-3 {
        // Series: bracket = x^2/3 - x^3/4 + ...
        return h0 * tau / (6.0 * t_c * t_c) * (1.0 - 0.75 * x);
    }
    let e1 = libm::exp(-x);
    let bracket = 1.0 - (3.0 - 4.0 * e1 + e1 * e1) / (2.0 * x);
    h0 / (2.0 * tau) * bracket
}

/// Universal shapes of servo-filtered noise, as functions of c = T/tau (T the servo time
/// constant), tabulated once from [`variance`] on ln c in [SHAPE_LO, SHAPE_HI]:
/// - flicker FM through the high-pass x^2/(1+x^2), x = 2 pi f T: Allan and modified
///   variance per unit h_-1 (scale-free, so a function of c alone);
/// - white FM through the low-pass 1/(1+x^2): modified variance times tau per unit h0.
struct Shapes {
    flicker_hp_allan: Vec<f64>,
    flicker_hp_mod: Vec<f64>,
    white_lp_mod: Vec<f64>,
}

const SHAPE_LO: f64 = -36.0;
const SHAPE_HI: f64 = 32.0;
const SHAPE_STEP: f64 = 0.25;

fn shapes() -> &'static Shapes {
    static SHAPES: std::sync::OnceLock<Shapes> = std::sync::OnceLock::new();
    SHAPES.get_or_init(|| {
        let n = ((SHAPE_HI - SHAPE_LO) / SHAPE_STEP) as usize + 1;
        let mut s = Shapes { flicker_hp_allan: Vec::with_capacity(n), flicker_hp_mod: Vec::with_capacity(n), white_lp_mod: Vec::with_capacity(n) };
        for k in 0..n {
            let c = libm::exp(SHAPE_LO + SHAPE_STEP * k as f64);
            let corner = 1.0 / (2.0 * PI * c);
            let hp = move |f: f64| {
                let x = 2.0 * PI * f * c;
                let x2 = x * x;
                x2 / (1.0 + x2)
            };
            let flicker = move |f: f64| hp(f) / f;
            let white_lp = move |f: f64| {
                let x = 2.0 * PI * f * c;
                1.0 / (1.0 + x * x)
            };
            s.flicker_hp_allan.push(libm::log(variance(&flicker, 1.0, Variance::Allan, &[corner])));
            s.flicker_hp_mod.push(libm::log(variance(&flicker, 1.0, Variance::Modified, &[corner])));
            s.white_lp_mod.push(libm::log(variance(&white_lp, 1.0, Variance::Modified, &[corner])));
        }
        s
    })
}

/// Six-point Lagrange interpolation of a table of ln values on the ln c grid, linear
/// extrapolation of the end slope outside it.
fn shape_at(table: &[f64], c: f64) -> f64 {
    let l = libm::log(c);
    let x = (l - SHAPE_LO) / SHAPE_STEP;
    let n = table.len();
    if x <= 0.0 {
        return libm::exp(table[0] + (table[1] - table[0]) * x);
    }
    if x >= (n - 1) as f64 {
        return libm::exp(table[n - 1] + (table[n - 1] - table[n - 2]) * (x - (n - 1) as f64));
    }
    let first = (libm::floor(x) as usize).saturating_sub(2).min(n - 6);
    // Six-point Lagrange interpolation on unit-spaced nodes: the weight of node i is
    // prod_{j != i} (u - j) / prod_{j != i} (i - j), with the constant denominators
    // 1/prod_{j != i}(i - j) = (-1)^(5-i) / (i! (5-i)!) and the numerators from prefix
    // and suffix products.
    const INV_DENOM: [f64; 6] = [-1.0 / 120.0, 1.0 / 24.0, -1.0 / 12.0, 1.0 / 12.0, -1.0 / 24.0, 1.0 / 120.0];
    let u = x - first as f64;
    let d = [u, u - 1.0, u - 2.0, u - 3.0, u - 4.0, u - 5.0];
    let mut prefix = [1.0; 6];
    for i in 1..6 {
        prefix[i] = prefix[i - 1] * d[i - 1];
    }
    let mut v = 0.0;
    let mut suffix = 1.0;
    for i in (0..6).rev() {
        v += prefix[i] * suffix * INV_DENOM[i] * table[first + i];
        suffix *= d[i];
    }
    libm::exp(v)
}

/// Allan variance of flicker FM h_-1/f through the servo high-pass of time constant `t_c`.
pub fn allan_variance_flicker_highpass(h: f64, tau: f64, t_c: f64) -> f64 {
    h * shape_at(&shapes().flicker_hp_allan, t_c / tau)
}

/// Modified Allan variance of flicker FM h_-1/f through the servo high-pass.
pub fn mod_variance_flicker_highpass(h: f64, tau: f64, t_c: f64) -> f64 {
    h * shape_at(&shapes().flicker_hp_mod, t_c / tau)
}

/// Modified Allan variance of white FM h0 through the servo low-pass 1/(1 + (2 pi f T)^2).
pub fn mod_variance_lowpass_white(h0: f64, tau: f64, t_c: f64) -> f64 {
    h0 / tau * shape_at(&shapes().white_lp_mod, t_c / tau)
}
