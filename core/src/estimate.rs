//! Frequency-stability estimators of measured or simulated data: overlapping Allan,
//! modified Allan and overlapping Hadamard deviations, with equivalent degrees of freedom
//! (EDF), chi-square confidence intervals and noise identification.
//!
//! Data are evenly spaced, either fractional frequency y_i (dimensionless, each the average
//! over one sample interval tau0) or phase x_i (seconds). Frequency data are used as the
//! phase x_0 = 0, x_(k+1) = x_k + tau0 y_k, so N frequency values are N + 1 phase points.
//! With tau = m tau0 and N_x phase points (Handbook of Frequency Stability
//! Analysis, Special Publication 1065 (2008), sections 5.2.4, 5.2.5 and 5.2.9):
//!
//! - overlapping Allan variance: sum over i < N_x - 2m of (x_(i+2m) - 2 x_(i+m) + x_i)^2,
//!   divided by 2 tau^2 (N_x - 2m);
//! - modified Allan variance: sum over j < N_x - 3m + 1 of the square of the sum over
//!   i = j .. j+m-1 of (x_(i+2m) - 2 x_(i+m) + x_i), divided by 2 m^2 tau^2 (N_x - 3m + 1);
//! - overlapping Hadamard variance: sum over i < N_x - 3m of
//!   (x_(i+3m) - 3 x_(i+2m) + 3 x_(i+m) - x_i)^2, divided by 6 tau^2 (N_x - 3m).
//!
//! # Speed and rounding
//!
//! Frequency data are summed once into prefix sums kept as double-double pairs (the sum
//! and its accumulated rounding error, Neumaier's compensated summation), so any window sum
//! of y costs two subtractions and is accurate to about one rounding of the window sum
//! itself, however long the record or large its mean. Each estimator is then one pass over
//! the data per tau (the modified one builds a second prefix sum of the second differences):
//! O(N) per tau. The squares are accumulated in blocks of 1024 with a compensated total.
//!
//! # Gaps
//!
//! NaN samples mark gaps. A term is skipped when any sample it needs is a gap: for
//! frequency data every y_k in the term's span (the phase differences need all of them);
//! for phase data the phase points the term uses (for the modified variance, all the points
//! of its m second differences). The number of terms reported is the number used. The EDF is
//! computed as if the used terms were contiguous (an approximation when gaps are many).
//! Infinite values are rejected.
//!
//! # EDF and confidence intervals
//!
//! The EDF of each point is the Gaussian value 2 E[V]^2 / Var[V] of the estimator V for
//! power-law noise S_y ~ f^alpha, computed by the finite-difference method that the handbook
//! cites for all three estimators ("Uncertainty of stability
//! variances based on finite differences", Proc. 35th PTTI Meeting (2003)): with the
//! generalized autocovariance sw(t) of the integrated phase (t in units of tau; -|t|,
//! t^2 ln|t|, |t|^3, -t^4 ln|t|, -|t|^5 for alpha = 2 .. -2), the phase averaged over a
//! window 1/F has sx(t) = F^2 (2 sw(t) - sw(t - 1/F) - sw(t + 1/F)), the d-th difference
//! sz(t) = sum_k (-1)^k C(2d, d+k) sx(t + k) (d = 2 Allan and modified, d = 3 Hadamard), and
//! 1/EDF = [sz(0)^2 + 2 sum_(k=1..M-1) (1 - k/M) sz(k/m)^2] / (M sz(0)^2) for M overlapping
//! terms. F = 1 for the modified variance; for the unmodified ones F = m for phase noise
//! (alpha >= 1: each phase sample an average over tau0) and F = infinity for frequency noise
//! (alpha <= 0: exact for y as tau0 averages). The lag sum is exact (direct) up to 2048 lags;
//! beyond, it is summed directly within 64 lags of every multiple of m (where sz has its
//! kinks) and by 8-point Gauss-Legendre on geometrically growing panels elsewhere; for the
//! flicker laws (alpha = +-1) the lags are truncated at 50 tau (the neglected tail is below
//! 1e-5 of the sum). The simple formulas of the handbook for the overlapping Allan variance
//! (from Proc. 35th Frequency Control Symposium,
//! 669 (1981)) are given by [`edf_allan_simple`]; they agree with this within 3 % for white
//! FM and white PM and within about 12 % for flicker and random-walk FM, and overestimate
//! flicker PM at large m (Monte Carlo on synthesised data sides with this method there).
//! The method models continuous-time noise; for the discrete fractional-differencing processes
//! ([`crate::synthesis`]) the EDF differs by up to about 20 % at m = 1 and 2 (random-walk FM:
//! 0.89 M instead of M at m = 1) and for flicker PM (about 20 % lower, i.e. conservative).
//!
//! The confidence interval of the deviation for confidence c is
//! [sigma sqrt(EDF / chi2_q((1+c)/2)), sigma sqrt(EDF / chi2_q((1-c)/2))] (handbook
//! section 5.3), with chi-square quantiles from this module's regularised incomplete gamma
//! function (series and continued fraction) and a safeguarded Newton inversion.
//!
//! # Noise identification
//!
//! The lag-1 autocorrelation method (handbook section 5.5.4; 
//! "Power law noise identification using the lag 1 autocorrelation", Proc. 18th European
//! Frequency and Time Forum (2004)): frequency data are averaged over blocks of m, phase data
//! decimated by m; the series is differenced until delta = r1/(1 + r1) < 0.25 (at most twice)
//! and alpha = -2 (delta + d) (+2 for phase data), rounded and limited to -2..2. It needs at
//! least [`MIN_ID_POINTS`] valid values; otherwise the identification at the largest m/2^k
//! that has them is used. At most the first [`MAX_ID_POINTS`] averaged values are used.

use crate::error::{show, Checker, InputError};
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;

/// Largest number of data points accepted.
pub const MAX_POINTS: usize = 100_000_000;
/// Largest number of averaging factors in one request.
pub const MAX_TAUS: usize = 10_000;
/// Largest magnitude of a data value (keeps every sum of squares finite).
pub const MAX_ABS_VALUE: f64 = 1e100;
/// Largest sample interval, seconds.
pub const MAX_TAU0_S: f64 = 1e9;
/// Fewest valid averaged values for the lag-1 autocorrelation noise identification.
pub const MIN_ID_POINTS: usize = 32;
/// Most averaged values used by the noise identification (the first ones): the standard
/// error of r1 is then about 1e-3, far inside the decision bands of width 0.25 in delta.
pub const MAX_ID_POINTS: usize = 1 << 20;
/// Confidence levels accepted.
pub const CONFIDENCE_RANGE: (f64, f64) = (0.01, 0.999_999);
/// Degrees of freedom accepted by the chi-square functions (below 0.1 the lower quantiles
/// for p near 1e-12 underflow the double range).
pub const DOF_RANGE: (f64, f64) = (0.1, 1e10);
/// Most terms of the incomplete-gamma series or continued fraction (enough for a = 5e9).
pub const MAX_GAMMA_TERMS: usize = 1_000_000;

/// Evenly spaced input data.
///
/// ```
/// use clockwright_core::estimate::Series;
/// let y = [1e-13, -2e-13, 0.5e-13];
/// let s = Series::Frequency(&y);
/// assert_eq!(s.len(), 3);
/// ```
#[derive(Debug, Clone, Copy)]
pub enum Series<'a> {
    /// Fractional frequency y_i (dimensionless); NaN marks a gap.
    Frequency(&'a [f64]),
    /// Phase (time deviation) x_i in seconds; NaN marks a gap.
    Phase(&'a [f64]),
}

impl Series<'_> {
    /// Number of samples.
    pub fn len(&self) -> usize {
        match self {
            Series::Frequency(v) | Series::Phase(v) => v.len(),
        }
    }
    /// True when there are no samples.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }
    fn values(&self) -> &[f64] {
        match self {
            Series::Frequency(v) | Series::Phase(v) => v,
        }
    }
    fn path(&self) -> &'static str {
        match self {
            Series::Frequency(_) => "frequency",
            Series::Phase(_) => "phase",
        }
    }
    /// Number of phase points (N + 1 for N frequency values).
    fn phase_points(&self) -> usize {
        match self {
            Series::Frequency(v) => v.len() + 1,
            Series::Phase(v) => v.len(),
        }
    }
}

/// Which averaging factors m (tau = m tau0) to evaluate.
///
/// ```
/// use clockwright_core::estimate::Taus;
/// let t: Taus = serde_json::from_str(r#"{"list":[1,10,100]}"#).unwrap();
/// assert_eq!(t, Taus::List(vec![1, 10, 100]));
/// assert_eq!(serde_json::to_string(&Taus::Octave).unwrap(), r#""octave""#);
/// ```
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Taus {
    /// 1, 2, 4, 8, ... up to the largest m the estimator allows.
    Octave,
    /// Every m from 1 to the largest (at most [`MAX_TAUS`] of them).
    All,
    /// These m, strictly increasing, each from 1 to the largest.
    List(Vec<u64>),
}

/// The estimator.
///
/// ```
/// use clockwright_core::estimate::Estimator;
/// assert_eq!(serde_json::to_string(&Estimator::ModifiedAllan).unwrap(), r#""modified_allan""#);
/// ```
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Estimator {
    /// Overlapping Allan deviation.
    Allan,
    /// Modified Allan deviation.
    ModifiedAllan,
    /// Overlapping Hadamard deviation.
    Hadamard,
}

impl Estimator {
    /// Order d of the phase difference (2 Allan and modified, 3 Hadamard).
    fn order(self) -> usize {
        match self {
            Estimator::Hadamard => 3,
            _ => 2,
        }
    }
    /// Largest averaging factor for `n` phase points (0 if none).
    ///
    /// ```
    /// use clockwright_core::estimate::Estimator;
    /// assert_eq!(Estimator::Allan.max_m(11), 5);
    /// assert_eq!(Estimator::ModifiedAllan.max_m(12), 4);
    /// assert_eq!(Estimator::Hadamard.max_m(12), 3);
    /// ```
    pub fn max_m(self, n_phase: usize) -> u64 {
        let n = n_phase as u64;
        match self {
            Estimator::Allan => n.saturating_sub(1) / 2,
            Estimator::ModifiedAllan => n / 3,
            Estimator::Hadamard => n.saturating_sub(1) / 3,
        }
    }
    /// Number of terms at averaging factor m for `n_phase` phase points, without gaps.
    ///
    /// ```
    /// use clockwright_core::estimate::Estimator;
    /// assert_eq!(Estimator::Allan.terms(11, 2), 7);
    /// assert_eq!(Estimator::ModifiedAllan.terms(11, 2), 6);
    /// assert_eq!(Estimator::Hadamard.terms(11, 2), 5);
    /// ```
    pub fn terms(self, n_phase: usize, m: u64) -> u64 {
        let n = n_phase as u64;
        match self {
            Estimator::Allan => n.saturating_sub(2 * m),
            Estimator::ModifiedAllan => (n + 1).saturating_sub(3 * m),
            Estimator::Hadamard => n.saturating_sub(3 * m),
        }
    }
}

/// Options of [`estimate`].
///
/// `confidence` is the two-sided confidence level of the interval (default 0.683);
/// `alpha`, when given, is the power-law exponent of S_y (-2..=2) used for the EDF at every
/// tau instead of identifying it from the data.
///
/// ```
/// use clockwright_core::estimate::{Options, Taus};
/// let o: Options = serde_json::from_str(r#"{"taus":"all","confidence":0.95}"#).unwrap();
/// assert_eq!(o.taus, Taus::All);
/// assert_eq!(o.alpha, None);
/// assert_eq!(Options::default().confidence, 0.683);
/// ```
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct Options {
    pub taus: Taus,
    pub confidence: f64,
    pub alpha: Option<i32>,
}

impl Default for Options {
    fn default() -> Self {
        Options { taus: Taus::Octave, confidence: 0.683, alpha: None }
    }
}

/// Where the noise exponent of a point came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum AlphaSource {
    /// Given in the options.
    Given,
    /// Identified by the lag-1 autocorrelation at averaging factor `alpha_m` of the point.
    Identified,
    /// Too few data at every m/2^k: white FM (alpha 0) assumed.
    Default,
}

/// One averaging time.
///
/// `tau_s` in seconds; `deviation` dimensionless; `terms` the number of terms summed;
/// `edf` the equivalent degrees of freedom; `ci_low`..`ci_high` the confidence interval of the
/// deviation; `alpha` the noise exponent used for the EDF and `alpha_m` the averaging factor
/// at which it was identified (0 when given or assumed).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Point {
    pub m: u64,
    pub tau_s: f64,
    pub deviation: f64,
    pub terms: u64,
    pub edf: f64,
    pub ci_low: f64,
    pub ci_high: f64,
    pub alpha: i32,
    pub alpha_source: AlphaSource,
    pub alpha_m: u64,
}

/// Result of [`estimate`]: the points in increasing tau, the averaging factors skipped because
/// gaps left them without a single term, and the gap count (`gap_samples` NaN samples in
/// `gaps` runs).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Estimate {
    pub estimator: Estimator,
    pub tau0_s: f64,
    pub confidence: f64,
    pub samples: u64,
    pub gap_samples: u64,
    pub gaps: u64,
    pub skipped_m: Vec<u64>,
    pub points: Vec<Point>,
}

// ---------------------------------------------------------------------------------------
// Input checks and preparation

fn check_series(c: &mut Checker, s: &Series) {
    let v = s.values();
    if v.len() > MAX_POINTS {
        c.push(s.path(), format!("{} values", v.len()), format!("at most {MAX_POINTS} values"));
        return;
    }
    for (i, &x) in v.iter().enumerate() {
        if x.is_infinite() || (!x.is_nan() && x.abs() > MAX_ABS_VALUE) {
            c.push(format!("{}[{i}]", s.path()), show(x), format!("must be finite with magnitude at most {} (NaN marks a gap)", show(MAX_ABS_VALUE)));
            return;
        }
    }
}

fn check_tau0(c: &mut Checker, tau0_s: f64) {
    c.above("tau0_s", tau0_s, 0.0, MAX_TAU0_S, "s");
}

fn check_alpha(c: &mut Checker, path: &str, alpha: i32) {
    if !(-2..=2).contains(&alpha) {
        c.push(path, alpha.to_string(), "must be an integer from -2 to 2 (S_y proportional to f^alpha)");
    }
}

/// Neumaier's compensated addition into (sum, error).
#[inline]
fn add_dd(s: &mut f64, c: &mut f64, v: f64) {
    let t = *s + v;
    if s.abs() >= v.abs() {
        *c += (*s - t) + v;
    } else {
        *c += (v - t) + *s;
    }
    *s = t;
}

/// Sum of squares accumulated in blocks with a compensated total.
struct Acc {
    block: f64,
    n: u32,
    s: f64,
    c: f64,
}

impl Acc {
    fn new() -> Self {
        Acc { block: 0.0, n: 0, s: 0.0, c: 0.0 }
    }
    #[inline]
    fn add(&mut self, v: f64) {
        self.block += v;
        self.n += 1;
        if self.n == 1024 {
            add_dd(&mut self.s, &mut self.c, self.block);
            self.block = 0.0;
            self.n = 0;
        }
    }
    fn total(mut self) -> f64 {
        add_dd(&mut self.s, &mut self.c, self.block);
        self.s + self.c
    }
}

/// Frequency data as double-double prefix sums (NaN as 0), interleaved as [sum, error]
/// pairs, plus prefix gap counts.
struct Prefix {
    dd: Vec<[f64; 2]>,
    gaps: Option<Vec<u32>>,
}

impl Prefix {
    fn new(y: &[f64]) -> Self {
        let mut dd = Vec::with_capacity(y.len() + 1);
        let any_gap = y.iter().any(|v| v.is_nan());
        let mut gaps = if any_gap { Some(Vec::with_capacity(y.len() + 1)) } else { None };
        let (mut s, mut c) = (0.0, 0.0);
        let mut g = 0u32;
        dd.push([0.0, 0.0]);
        if let Some(gv) = gaps.as_mut() {
            gv.push(0);
        }
        for &v in y {
            if v.is_nan() {
                g += 1;
            } else {
                add_dd(&mut s, &mut c, v);
            }
            dd.push([s, c]);
            if let Some(gv) = gaps.as_mut() {
                gv.push(g);
            }
        }
        Prefix { dd, gaps }
    }
    /// Sum of y over [a, b).
    #[inline]
    fn window(&self, a: usize, b: usize) -> f64 {
        win(&self.dd[a], &self.dd[b])
    }
    #[inline]
    fn clean(&self, a: usize, b: usize) -> bool {
        match &self.gaps {
            None => true,
            Some(g) => g[b] == g[a],
        }
    }
}

#[inline(always)]
fn win(a: &[f64; 2], b: &[f64; 2]) -> f64 {
    (b[0] - a[0]) + (b[1] - a[1])
}

/// Sum of f(i)^2 for i < n: blocks of 1024 with four partial sums each (so that the adds
/// do not wait on one another), block totals added with compensation.
#[inline(always)]
fn sum_sq(n: usize, f: impl Fn(usize) -> f64) -> f64 {
    let (mut s, mut c) = (0.0, 0.0);
    let mut i = 0;
    while i < n {
        let end = (i + 1024).min(n);
        let mut p = [0.0f64; 4];
        let mut j = i;
        while j + 4 <= end {
            let (d0, d1, d2, d3) = (f(j), f(j + 1), f(j + 2), f(j + 3));
            p[0] += d0 * d0;
            p[1] += d1 * d1;
            p[2] += d2 * d2;
            p[3] += d3 * d3;
            j += 4;
        }
        while j < end {
            let d = f(j);
            p[0] += d * d;
            j += 1;
        }
        add_dd(&mut s, &mut c, (p[0] + p[1]) + (p[2] + p[3]));
        i = end;
    }
    s + c
}

enum Prep<'a> {
    Freq(Prefix),
    Phase(&'a [f64]),
}

/// Sum of squared terms and number of terms of one estimator at averaging factor m, in
/// the natural units (frequency data: sums of y; phase data: seconds).
fn sum_squares(p: &Prep, n_phase: usize, est: Estimator, m: usize, scratch: &mut Scratch) -> (f64, u64) {
    let mut acc = Acc::new();
    let mut count = 0u64;
    match (est, p) {
        (Estimator::Allan, Prep::Freq(pf)) => {
            let n = n_phase - 2 * m;
            if pf.gaps.is_none() {
                let (a, b, c) = (&pf.dd[..n], &pf.dd[m..m + n], &pf.dd[2 * m..2 * m + n]);
                return (sum_sq(n, |i| win(&b[i], &c[i]) - win(&a[i], &b[i])), n as u64);
            }
            for i in 0..n {
                if pf.clean(i, i + 2 * m) {
                    let d = pf.window(i + m, i + 2 * m) - pf.window(i, i + m);
                    acc.add(d * d);
                    count += 1;
                }
            }
        }
        (Estimator::Allan, Prep::Phase(x)) => {
            for i in 0..n_phase - 2 * m {
                let d = x[i + 2 * m] - 2.0 * x[i + m] + x[i];
                if !d.is_nan() {
                    acc.add(d * d);
                    count += 1;
                }
            }
        }
        (Estimator::Hadamard, Prep::Freq(pf)) => {
            let n = n_phase - 3 * m;
            if pf.gaps.is_none() {
                let (a, b) = (&pf.dd[..n], &pf.dd[m..m + n]);
                let (c, d) = (&pf.dd[2 * m..2 * m + n], &pf.dd[3 * m..3 * m + n]);
                return (sum_sq(n, |i| (win(&c[i], &d[i]) - win(&b[i], &c[i])) - (win(&b[i], &c[i]) - win(&a[i], &b[i]))), n as u64);
            }
            for i in 0..n {
                if pf.clean(i, i + 3 * m) {
                    let w1 = pf.window(i, i + m);
                    let w2 = pf.window(i + m, i + 2 * m);
                    let w3 = pf.window(i + 2 * m, i + 3 * m);
                    let d = (w3 - w2) - (w2 - w1);
                    acc.add(d * d);
                    count += 1;
                }
            }
        }
        (Estimator::Hadamard, Prep::Phase(x)) => {
            for i in 0..n_phase - 3 * m {
                let d = (x[i + 3 * m] - x[i]) - 3.0 * (x[i + 2 * m] - x[i + m]);
                if !d.is_nan() {
                    acc.add(d * d);
                    count += 1;
                }
            }
        }
        (Estimator::ModifiedAllan, _) => {
            // Second differences sd_i (i < L), their double-double prefix sums and the prefix
            // count of invalid ones; then window sums of m of them.
            let l = n_phase - 2 * m;
            scratch.reset(l + 1);
            let (mut s, mut c) = (0.0, 0.0);
            let mut bad = 0u32;
            for i in 0..l {
                let d = match p {
                    Prep::Freq(pf) => {
                        if pf.clean(i, i + 2 * m) {
                            pf.window(i + m, i + 2 * m) - pf.window(i, i + m)
                        } else {
                            f64::NAN
                        }
                    }
                    Prep::Phase(x) => x[i + 2 * m] - 2.0 * x[i + m] + x[i],
                };
                if d.is_nan() {
                    bad += 1;
                } else {
                    add_dd(&mut s, &mut c, d);
                }
                scratch.dd.push([s, c]);
                scratch.bad.push(bad);
            }
            let (dd, b) = (&scratch.dd, &scratch.bad);
            let nw = l - m + 1;
            if b[l] == 0 {
                let (lo, hi) = (&dd[..nw], &dd[m..m + nw]);
                return (sum_sq(nw, |j| win(&lo[j], &hi[j])), nw as u64);
            }
            for j in 0..nw {
                if b[j + m] == b[j] {
                    let w = win(&dd[j], &dd[j + m]);
                    acc.add(w * w);
                    count += 1;
                }
            }
        }
    }
    (acc.total(), count)
}

struct Scratch {
    dd: Vec<[f64; 2]>,
    bad: Vec<u32>,
}

impl Scratch {
    fn reset(&mut self, n: usize) {
        self.dd.clear();
        self.bad.clear();
        self.dd.reserve(n);
        self.bad.reserve(n);
        self.dd.push([0.0, 0.0]);
        self.bad.push(0);
    }
}

/// Power-of-two averaging factors of frequency data by in-place doubling: the buffer holds
/// window sums W_m(i) = sum of y over [i, i+m) (for the modified variance the sums of m of
/// them, T_m(j) = sum_(i=j..j+m-1) W_m(i)), and W_2m(i) = W_m(i) + W_m(i+m),
/// T_2m(j) = T_m(j) + 2 T_m(j+m) + T_m(j+2m). Each factor costs one pass with the term
/// computation fused into the update; the sums are pairwise, so their rounding does not
/// grow with the record. NaN gaps propagate into exactly the windows that touch them.
/// Returns (m, sum of squares, terms) for the requested `ms` (all powers of two, increasing)
/// and, when `ids` is given, the noise identification at every power of two up to the last.
fn doubling(y: &[f64], est: Estimator, ms: &[u64], mut ids: Option<&mut BTreeMap<u64, Option<i32>>>) -> Vec<(u64, f64, u64)> {
    let n = y.len();
    let gapless = !y.iter().any(|v| v.is_nan());
    let mut w: Vec<f64> = y.to_vec();
    // Valid length of the buffer: n - m + 1 window sums W_m, n - 2m + 2 sums T_m.
    let mut out = Vec::with_capacity(ms.len());
    let last = ms.last().copied().unwrap_or(0);
    let mut want = ms.iter().copied().peekable();
    let mut m = 1usize;
    // At most 64 doublings (m < 2^64); in practice log2(n).
    while m as u64 <= last {
        let wanted = want.peek() == Some(&(m as u64));
        if wanted {
            want.next();
        }
        if let Some(ids) = ids.as_deref_mut() {
            if est != Estimator::ModifiedAllan {
                let blocks = (n / m).min(MAX_ID_POINTS);
                let id = if blocks >= MIN_ID_POINTS {
                    identify_series((0..blocks).map(|k| w[k * m] / m as f64).collect(), false).map(|i| i.alpha)
                } else {
                    None
                };
                ids.insert(m as u64, id);
            }
        }
        match est {
            Estimator::Allan => {
                // Terms i <= n - 2m; update the same range to W_2m.
                let cnt = (n + 1).saturating_sub(2 * m);
                let (mut p, mut c) = (0.0, 0.0);
                let mut valid = 0u64;
                let mut acc = [0.0f64; 4];
                let mut i = 0;
                while i < cnt {
                    let end = (i + 1024).min(cnt);
                    if gapless {
                        let mut j = i;
                        while j + 4 <= end {
                            for l in 0..4 {
                                let (a, b) = (w[j + l], w[j + l + m]);
                                let d = b - a;
                                acc[l] += d * d;
                                w[j + l] = a + b;
                            }
                            j += 4;
                        }
                        for k in j..end {
                            let (a, b) = (w[k], w[k + m]);
                            let d = b - a;
                            acc[0] += d * d;
                            w[k] = a + b;
                        }
                        valid += (end - i) as u64;
                    } else {
                        for k in i..end {
                            let (a, b) = (w[k], w[k + m]);
                            let d = b - a;
                            if !d.is_nan() {
                                acc[0] += d * d;
                                valid += 1;
                            }
                            w[k] = a + b;
                        }
                    }
                    add_dd(&mut p, &mut c, (acc[0] + acc[1]) + (acc[2] + acc[3]));
                    acc = [0.0; 4];
                    i = end;
                }
                if wanted {
                    out.push((m as u64, p + c, valid));
                }
                w.truncate(cnt);
            }
            Estimator::Hadamard => {
                let cnt = (n + 1).saturating_sub(3 * m);
                if wanted {
                    let mut valid = 0u64;
                    let total = sum_sq(cnt, |i| {
                        let d = (w[i + 2 * m] - w[i + m]) - (w[i + m] - w[i]);
                        if d.is_nan() {
                            0.0
                        } else {
                            d
                        }
                    });
                    if gapless {
                        valid = cnt as u64;
                    } else {
                        for i in 0..cnt {
                            if !((w[i + 2 * m] - w[i + m]) - (w[i + m] - w[i])).is_nan() {
                                valid += 1;
                            }
                        }
                    }
                    out.push((m as u64, total, valid));
                }
                let keep = (n + 1).saturating_sub(2 * m);
                for i in 0..keep {
                    w[i] += w[i + m];
                }
                w.truncate(keep);
            }
            Estimator::ModifiedAllan => {
                // Buffer holds T_m (T_1 = y); terms s_j = T_m(j+m) - T_m(j), j <= n + 1 - 3m.
                let cnt = (n + 2).saturating_sub(3 * m);
                if let Some(ids) = ids.as_deref_mut() {
                    // Block means need W_m, which this buffer does not hold: identify from a
                    // prefix sum instead (once, on the first pass).
                    if m == 1 {
                        let prep = Prep::Freq(Prefix::new(y));
                        let mut mm = 1u64;
                        // At most 64 factors.
                        while mm <= last {
                            ids.insert(mm, identify_prepared(&prep, n, n + 1, mm).map(|i| i.alpha));
                            mm *= 2;
                        }
                    }
                }
                if wanted {
                    let total = sum_sq(cnt, |j| {
                        let d = w[j + m] - w[j];
                        if d.is_nan() {
                            0.0
                        } else {
                            d
                        }
                    });
                    let valid = if gapless { cnt as u64 } else { (0..cnt).filter(|&j| !(w[j + m] - w[j]).is_nan()).count() as u64 };
                    out.push((m as u64, total, valid));
                }
                let keep = (n + 2).saturating_sub(4 * m);
                for j in 0..keep {
                    w[j] = (w[j] + w[j + 2 * m]) + 2.0 * w[j + m];
                }
                w.truncate(keep);
            }
        }
        if w.is_empty() {
            break;
        }
        m *= 2;
    }
    out
}

/// The variance from the sum of squares (see module docs for the normalisations).
fn variance_from(est: Estimator, sum: f64, count: u64, m: usize, tau0: f64, freq: bool) -> f64 {
    let mf = m as f64;
    let tau = mf * tau0;
    // Frequency sums: x differences are tau0 times sums of y.
    let unit = if freq { tau0 * tau0 } else { 1.0 };
    let denom = match est {
        Estimator::Allan => 2.0 * tau * tau,
        Estimator::ModifiedAllan => 2.0 * mf * mf * tau * tau,
        Estimator::Hadamard => 6.0 * tau * tau,
    };
    unit * sum / (denom * count as f64)
}

fn m_list(c: &mut Checker, taus: &Taus, max_m: u64) -> Vec<u64> {
    match taus {
        Taus::Octave => {
            let mut v = Vec::new();
            let mut m = 1u64;
            while m <= max_m {
                v.push(m);
                m *= 2;
            }
            v
        }
        Taus::All => {
            if max_m as usize > MAX_TAUS {
                c.push("taus", format!("all ({max_m} averaging factors)"), format!("at most {MAX_TAUS} averaging factors; use octave or a list"));
                Vec::new()
            } else {
                (1..=max_m).collect()
            }
        }
        Taus::List(list) => {
            if list.is_empty() || list.len() > MAX_TAUS {
                c.push("taus.list", format!("{} values", list.len()), format!("must have from 1 to {MAX_TAUS} averaging factors"));
                return Vec::new();
            }
            for (i, &m) in list.iter().enumerate() {
                if m < 1 || m > max_m {
                    c.push(format!("taus.list[{i}]"), m.to_string(), format!("must be from 1 to {max_m} for this estimator and record length"));
                } else if i > 0 && m <= list[i - 1] {
                    c.push(format!("taus.list[{i}]"), m.to_string(), format!("must be larger than the previous value {}", list[i - 1]));
                }
            }
            list.clone()
        }
    }
}

/// Estimates one deviation at the averaging factors of `options`.
///
/// `tau0_s` is the sample interval in seconds. Returns an error naming the first problems
/// (data too short, infinite values, bad taus or confidence) and never NaN: averaging
/// factors whose terms all touch gaps are listed in `skipped_m`.
///
/// ```
/// use clockwright_core::estimate::{estimate, Estimator, Options, Series};
/// // Linear frequency drift y_k = k: every Allan term is m, so sigma = m / sqrt(2).
/// let y: Vec<f64> = (0..64).map(|k| k as f64).collect();
/// let e = estimate(Series::Frequency(&y), 1.0, Estimator::Allan, &Options::default()).unwrap();
/// for p in &e.points {
///     assert!((p.deviation - p.m as f64 / 2f64.sqrt()).abs() < 1e-12 * p.m as f64);
///     assert!(p.ci_low <= p.deviation && p.deviation <= p.ci_high);
/// }
/// ```
pub fn estimate(series: Series, tau0_s: f64, estimator: Estimator, options: &Options) -> Result<Estimate, InputError> {
    let mut c = Checker::new();
    check_series(&mut c, &series);
    check_tau0(&mut c, tau0_s);
    c.range("confidence", options.confidence, CONFIDENCE_RANGE.0, CONFIDENCE_RANGE.1, "");
    if let Some(a) = options.alpha {
        check_alpha(&mut c, "alpha", a);
    }
    let n_phase = series.phase_points();
    let max_m = estimator.max_m(n_phase);
    if max_m < 1 && series.len() <= MAX_POINTS {
        let need = match (estimator, series) {
            (Estimator::Hadamard, Series::Frequency(_)) => 3,
            (Estimator::Hadamard, Series::Phase(_)) => 4,
            (_, Series::Frequency(_)) => 2,
            (_, Series::Phase(_)) => 3,
        };
        c.push(series.path(), format!("{} values", series.len()), format!("at least {need} values are needed for this estimator"));
    }
    c.finish()?;
    let mut c = Checker::new();
    let ms = m_list(&mut c, &options.taus, max_m);
    c.finish()?;

    let values = series.values();
    let gap_samples = values.iter().filter(|v| v.is_nan()).count() as u64;
    let gaps = values.iter().enumerate().filter(|(i, v)| v.is_nan() && (*i == 0 || !values[i - 1].is_nan())).count() as u64;
    let freq = matches!(series, Series::Frequency(_));
    let mut ids: BTreeMap<u64, Option<i32>> = BTreeMap::new();
    let need_ids = options.alpha.is_none();
    // Sums of squares: by doubling when every factor is a power of two (frequency data),
    // otherwise by prefix sums, one pass per factor.
    let sums: Vec<(u64, f64, u64)> = match series {
        Series::Frequency(y) if ms.iter().all(|m| m.is_power_of_two()) => doubling(y, estimator, &ms, if need_ids { Some(&mut ids) } else { None }),
        _ => Vec::new(),
    };
    let lazy_prep = std::cell::OnceCell::new();
    let prep = || {
        lazy_prep.get_or_init(|| match series {
            Series::Frequency(y) => Prep::Freq(Prefix::new(y)),
            Series::Phase(x) => Prep::Phase(x),
        })
    };
    let mut scratch = Scratch { dd: Vec::new(), bad: Vec::new() };
    let (q_lo, q_hi) = ((1.0 - options.confidence) / 2.0, (1.0 + options.confidence) / 2.0);
    let mut points = Vec::with_capacity(ms.len());
    let mut skipped = Vec::new();
    for (k, &m) in ms.iter().enumerate() {
        let (sum, count) = match sums.get(k) {
            Some(&(mm, sum, count)) if mm == m => (sum, count),
            _ => sum_squares(prep(), n_phase, estimator, m as usize, &mut scratch),
        };
        if count == 0 {
            skipped.push(m);
            continue;
        }
        let var = variance_from(estimator, sum, count, m as usize, tau0_s, freq).max(0.0);
        let dev = libm::sqrt(var);
        let (alpha, source, alpha_m) = match options.alpha {
            Some(a) => (a, AlphaSource::Given, 0),
            None => {
                let mut found = None;
                let mut mm = m;
                // At most 64 halvings: m < 2^64.
                while mm >= 1 {
                    let id = *ids.entry(mm).or_insert_with(|| identify_prepared(prep(), series.len(), n_phase, mm).map(|i| i.alpha));
                    if let Some(a) = id {
                        found = Some((a, AlphaSource::Identified, mm));
                        break;
                    }
                    mm /= 2;
                }
                found.unwrap_or((0, AlphaSource::Default, 0))
            }
        };
        let edf = edf_unchecked(estimator, alpha, m, count);
        let (chi_hi, chi_lo) = (chi2_quantile_unchecked(q_hi, edf), chi2_quantile_unchecked(q_lo, edf));
        points.push(Point {
            m,
            tau_s: m as f64 * tau0_s,
            deviation: dev,
            terms: count,
            edf,
            ci_low: dev * libm::sqrt(edf / chi_hi),
            ci_high: dev * libm::sqrt(edf / chi_lo),
            alpha,
            alpha_source: source,
            alpha_m,
        });
    }
    Ok(Estimate {
        estimator,
        tau0_s,
        confidence: options.confidence,
        samples: values.len() as u64,
        gap_samples,
        gaps,
        skipped_m: skipped,
        points,
    })
}

// ---------------------------------------------------------------------------------------
// Noise identification

/// Result of the lag-1 autocorrelation noise identification.
///
/// `alpha` is the exponent of S_y (-2..=2), `r1` the lag-1 autocorrelation of the series
/// after `differences` differences, `points` the number of valid averaged values.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct NoiseId {
    pub alpha: i32,
    pub r1: f64,
    pub differences: u32,
    pub points: u64,
}

/// Identifies the power-law noise at averaging factor `m` by the lag-1 autocorrelation
/// (module docs). `Ok(None)` when fewer than [`MIN_ID_POINTS`] valid averaged values remain
/// or the averaged data are constant.
///
/// ```
/// use clockwright_core::estimate::{identify_noise, Series};
/// use clockwright_core::synthesis::{synthesize, PowerLaw, Spec};
/// let y = synthesize(&Spec { tau0_s: 1.0, points: 4096, seed: 5, terms: vec![PowerLaw { alpha: -2, h: 1.0 }] }).unwrap();
/// let id = identify_noise(Series::Frequency(&y), 4).unwrap().unwrap();
/// assert_eq!(id.alpha, -2);
/// ```
pub fn identify_noise(series: Series, m: u64) -> Result<Option<NoiseId>, InputError> {
    let mut c = Checker::new();
    check_series(&mut c, &series);
    if m < 1 || m as usize > series.len().max(1) {
        c.push("m", m.to_string(), format!("must be from 1 to the number of samples ({})", series.len()));
    }
    c.finish()?;
    let n_phase = series.phase_points();
    let prep = match series {
        Series::Frequency(y) => Prep::Freq(Prefix::new(y)),
        Series::Phase(x) => Prep::Phase(x),
    };
    Ok(identify_prepared(&prep, series.len(), n_phase, m))
}

fn identify_prepared(p: &Prep, n: usize, n_phase: usize, m: u64) -> Option<NoiseId> {
    let m = m as usize;
    let (z, phase): (Vec<f64>, bool) = match p {
        Prep::Freq(pf) => {
            let blocks = (n / m).min(MAX_ID_POINTS);
            if blocks < MIN_ID_POINTS {
                return None;
            }
            ((0..blocks).map(|k| if pf.clean(k * m, (k + 1) * m) { pf.window(k * m, (k + 1) * m) / m as f64 } else { f64::NAN }).collect(), false)
        }
        Prep::Phase(x) => {
            let pts = ((n_phase - 1) / m + 1).min(MAX_ID_POINTS);
            if pts < MIN_ID_POINTS {
                return None;
            }
            ((0..pts).map(|k| x[k * m]).collect(), true)
        }
    };
    identify_series(z, phase)
}

/// Lag-1 autocorrelation of the valid pairs; None if too few values or zero variance.
fn lag1(z: &[f64]) -> Option<(f64, usize)> {
    let (mut sum, mut valid) = (0.0, 0usize);
    for v in z.iter().filter(|v| !v.is_nan()) {
        sum += v;
        valid += 1;
    }
    if valid < MIN_ID_POINTS {
        return None;
    }
    let mean = sum / valid as f64;
    let (mut den, mut num) = (0.0, 0.0);
    let mut prev = f64::NAN;
    for &v in z {
        let e = v - mean;
        if !e.is_nan() {
            den += e * e;
            if !prev.is_nan() {
                num += e * prev;
            }
        }
        prev = e;
    }
    if den.is_nan() || den <= 0.0 || den.is_infinite() {
        return None;
    }
    Some((num / den, valid))
}

fn identify_series(mut z: Vec<f64>, phase: bool) -> Option<NoiseId> {
    const DMAX: u32 = 2;
    let mut d = 0u32;
    loop {
        let (r1, valid) = lag1(&z)?;
        let r1c = r1.clamp(-0.999, 0.999);
        let delta = r1c / (1.0 + r1c);
        if delta < 0.25 || d >= DMAX {
            let p = -2.0 * (delta + d as f64);
            let a = if phase { p + 2.0 } else { p };
            let alpha = (libm::round(a) as i32).clamp(-2, 2);
            return Some(NoiseId { alpha, r1, differences: d, points: valid as u64 });
        }
        z = z.windows(2).map(|w| w[1] - w[0]).collect();
        d += 1;
    }
}

// ---------------------------------------------------------------------------------------
// Equivalent degrees of freedom

/// Generalized autocovariance of the integrated phase for S_y ~ f^alpha (t in units of tau).
fn sw(t: f64, alpha: i32) -> f64 {
    let a = t.abs();
    match alpha {
        2 => -a,
        1 => {
            if a == 0.0 {
                0.0
            } else {
                a * a * libm::log(a)
            }
        }
        0 => a * a * a,
        -1 => {
            if a == 0.0 {
                0.0
            } else {
                -(a * a) * (a * a) * libm::log(a)
            }
        }
        _ => -(a * a) * (a * a) * a,
    }
}

/// -(sw'' + h^2 sw''''/12 + h^4 sw''''''/360): the phase covariance averaged over windows h,
/// for |t| well above h (exact for the polynomial laws when |t| >= h).
fn sx_series(t: f64, h: f64, alpha: i32) -> f64 {
    let a = t.abs();
    let h2 = h * h;
    match alpha {
        2 => 0.0,
        1 => {
            let t2 = a * a;
            -(2.0 * libm::log(a) + 3.0) + h2 / (6.0 * t2) + h2 * h2 / (30.0 * t2 * t2)
        }
        0 => -6.0 * a,
        -1 => {
            if a == 0.0 {
                return 0.0;
            }
            let l = libm::log(a);
            let t2 = a * a;
            12.0 * t2 * l + 7.0 * t2 + h2 * (2.0 * l + 25.0 / 6.0) - h2 * h2 / (15.0 * t2)
        }
        _ => 20.0 * a * a * a + 10.0 * h2 * a,
    }
}

struct EdfModel {
    alpha: i32,
    d: usize,
    /// Averaging rate F (1/window in units of tau); None is F = infinity.
    f: Option<f64>,
}

impl EdfModel {
    fn new(est: Estimator, alpha: i32, m: u64) -> Self {
        let f = match est {
            Estimator::ModifiedAllan => Some(1.0),
            _ if alpha >= 1 => Some(m as f64),
            _ => None,
        };
        EdfModel { alpha, d: est.order(), f }
    }
    fn sx(&self, t: f64) -> f64 {
        match self.f {
            None => sx_series(t, 0.0, self.alpha),
            Some(f) => {
                let h = 1.0 / f;
                if f > 1.0 && t.abs() > 10.0 * h {
                    sx_series(t, h, self.alpha)
                } else {
                    f * f * (2.0 * sw(t, self.alpha) - sw(t - h, self.alpha) - sw(t + h, self.alpha))
                }
            }
        }
    }
    fn sz(&self, t: f64) -> f64 {
        const D2: [f64; 5] = [1.0, -4.0, 6.0, -4.0, 1.0];
        const D3: [f64; 7] = [-1.0, 6.0, -15.0, 20.0, -15.0, 6.0, -1.0];
        let w: &[f64] = if self.d == 3 { &D3 } else { &D2 };
        let d = self.d as f64;
        w.iter().enumerate().map(|(i, c)| c * self.sx(t + i as f64 - d)).sum()
    }
}

/// Lags summed one by one up to this count; beyond, the panel scheme of the module docs.
const EDF_DIRECT_LAGS: u64 = 2048;
/// Lags summed directly on each side of a multiple of m in the panel scheme.
const EDF_EDGE_LAGS: u64 = 64;
/// Truncation of the lag sum for the flicker laws, in units of tau.
const EDF_FLICKER_CUT: u64 = 50;

use crate::allan::GL8;

fn gl8(f: &dyn Fn(f64) -> f64, a: f64, b: f64) -> f64 {
    let (c, h) = ((a + b) / 2.0, (b - a) / 2.0);
    GL8.iter().map(|(x, w)| w * h * f(c + x * h)).sum()
}

fn edf_unchecked(est: Estimator, alpha: i32, m: u64, terms: u64) -> f64 {
    let model = EdfModel::new(est, alpha, m);
    let mf = m as f64;
    let big_m = terms as f64;
    let z0 = model.sz(0.0);
    let phi = |k: f64| {
        let w = 1.0 - k / big_m;
        if w <= 0.0 {
            0.0
        } else {
            let z = model.sz(k / mf);
            w * z * z
        }
    };
    let units = if alpha == 1 || alpha == -1 { EDF_FLICKER_CUT } else { model.d as u64 + 2 };
    let kmax = terms.saturating_sub(1).min(units.saturating_mul(m));
    let mut sum = 0.0;
    if kmax <= EDF_DIRECT_LAGS {
        for k in 1..=kmax {
            sum += phi(k as f64);
        }
    } else {
        let smooth_from = (model.d as u64 + 2) * m;
        let mut cuts: Vec<u64> = (0..=units).map(|j| j * m).filter(|&k| k < kmax).collect();
        cuts.push(kmax);
        for w in cuts.windows(2) {
            let (a, b) = (w[0], w[1]);
            let len = b - a;
            if len <= 2 * EDF_EDGE_LAGS + 16 {
                for k in a + 1..=b {
                    sum += phi(k as f64);
                }
            } else if a >= smooth_from {
                sum += gl8(&phi, a as f64 + 0.5, b as f64 + 0.5);
            } else {
                for k in (a + 1..=a + EDF_EDGE_LAGS).chain(b - EDF_EDGE_LAGS + 1..=b) {
                    sum += phi(k as f64);
                }
                let mid = a + len / 2;
                // Geometric panels from each end to the middle; at most ~2 log_1.5(len) of them.
                let mut p = a + EDF_EDGE_LAGS;
                while p < mid {
                    let q = (a + ((p - a) as f64 * 1.5).ceil() as u64).min(mid);
                    sum += gl8(&phi, p as f64 + 0.5, q as f64 + 0.5);
                    p = q;
                }
                let mut p = b - EDF_EDGE_LAGS;
                while p > mid {
                    let q = b.saturating_sub(((b - p) as f64 * 1.5).ceil() as u64).max(mid);
                    sum += gl8(&phi, q as f64 + 0.5, p as f64 + 0.5);
                    p = q;
                }
            }
        }
    }
    let edf = big_m * z0 * z0 / (z0 * z0 + 2.0 * sum);
    // 1 <= EDF <= number of terms times a bounded factor; guard against rounding only.
    if edf.is_finite() && edf > 0.0 {
        edf
    } else {
        1.0
    }
}

/// Equivalent degrees of freedom of `estimator` with `terms` overlapping terms at averaging
/// factor `m`, for power-law noise S_y ~ f^alpha (module docs for the method).
///
/// ```
/// use clockwright_core::estimate::{edf, Estimator};
/// // White FM, overlapping Allan: about 3 M / (2 m) for many terms.
/// let v = edf(Estimator::Allan, 0, 10, 100_000).unwrap();
/// assert!((v / (3.0 * 100_000.0 / 20.0) - 1.0).abs() < 0.03);
/// ```
pub fn edf(estimator: Estimator, alpha: i32, m: u64, terms: u64) -> Result<f64, InputError> {
    let mut c = Checker::new();
    check_alpha(&mut c, "alpha", alpha);
    if m < 1 || m as usize > MAX_POINTS {
        c.push("m", m.to_string(), format!("must be from 1 to {MAX_POINTS}"));
    }
    if terms < 1 || terms as usize > MAX_POINTS {
        c.push("terms", terms.to_string(), format!("must be from 1 to {MAX_POINTS}"));
    }
    c.finish()?;
    Ok(edf_unchecked(estimator, alpha, m, terms))
}

/// The simple EDF formulas for the overlapping Allan variance tabulated in the handbook
/// (Proc. 35th Frequency Control Symposium, 669 (1981)), with `n_phase` phase points and factor `m`
/// (from memory):
/// white PM (N+1)(N-2m)/(2(N-m)); flicker PM exp(sqrt(ln((N-1)/(2m)) ln((2m+1)(N-1)/4)));
/// white FM [3(N-1)/(2m) - 2(N-2)/N] 4m^2/(4m^2+5); flicker FM 2(N-2)^2/(2.3N-4.9) for m = 1,
/// 5N^2/(4m(N+3m)) otherwise; random-walk FM (N-2)/m ((N-1)^2 - 3m(N-1) + 4m^2)/(N-3)^2.
///
/// ```
/// use clockwright_core::estimate::edf_allan_simple;
/// let v = edf_allan_simple(0, 1, 1001).unwrap();
/// assert!((v - (3.0 * 1000.0 / 2.0 - 2.0 * 999.0 / 1001.0) * 4.0 / 9.0).abs() < 1e-9);
/// ```
pub fn edf_allan_simple(alpha: i32, m: u64, n_phase: u64) -> Result<f64, InputError> {
    let mut c = Checker::new();
    check_alpha(&mut c, "alpha", alpha);
    if n_phase < 5 || n_phase as usize > MAX_POINTS + 1 {
        c.push("n_phase", n_phase.to_string(), format!("must be from 5 to {}", MAX_POINTS + 1));
    } else if m < 1 || 2 * m >= n_phase {
        c.push("m", m.to_string(), format!("must be from 1 to {}", (n_phase - 1) / 2));
    }
    c.finish()?;
    let n = n_phase as f64;
    let mf = m as f64;
    let v = match alpha {
        2 => (n + 1.0) * (n - 2.0 * mf) / (2.0 * (n - mf)),
        1 => {
            let a = libm::log((n - 1.0) / (2.0 * mf)).max(0.0);
            let b = libm::log((2.0 * mf + 1.0) * (n - 1.0) / 4.0).max(0.0);
            libm::exp(libm::sqrt(a * b))
        }
        0 => (3.0 * (n - 1.0) / (2.0 * mf) - 2.0 * (n - 2.0) / n) * 4.0 * mf * mf / (4.0 * mf * mf + 5.0),
        -1 => {
            if m == 1 {
                2.0 * (n - 2.0) * (n - 2.0) / (2.3 * n - 4.9)
            } else {
                5.0 * n * n / (4.0 * mf * (n + 3.0 * mf))
            }
        }
        _ => (n - 2.0) / mf * ((n - 1.0) * (n - 1.0) - 3.0 * mf * (n - 1.0) + 4.0 * mf * mf) / ((n - 3.0) * (n - 3.0)),
    };
    Ok(v.max(1.0))
}

// ---------------------------------------------------------------------------------------
// Chi-square distribution

/// ln x^a e^-x / Gamma(a + 1), accurate also for large a near x (Stirling split).
fn log_prefactor(a: f64, x: f64) -> f64 {
    if a < 30.0 {
        return a * libm::log(x) - x - libm::lgamma(a + 1.0);
    }
    // a ln x - x - lgamma(a+1) = a (ln(1+u) - u) - [lgamma(a+1) - a ln a + a], u = (x-a)/a,
    // and lgamma(a+1) - a ln a + a = 0.5 ln(2 pi a) + 1/(12a) - 1/(360a^3) + 1/(1260a^5)
    // - 1/(1680a^7) (Stirling series; next term below 1e-16 for a >= 30).
    let u = (x - a) / a;
    let main = a * (libm::log1p(u) - u);
    let ia = 1.0 / a;
    let ia2 = ia * ia;
    let stirling = 0.5 * libm::log(2.0 * std::f64::consts::PI * a) + ia * (1.0 / 12.0 - ia2 * (1.0 / 360.0 - ia2 * (1.0 / 1260.0 - ia2 / 1680.0)));
    main - stirling
}

/// (P, Q) = regularised lower and upper incomplete gamma functions; a > 0, x >= 0.
fn gamma_pq(a: f64, x: f64) -> (f64, f64) {
    if x <= 0.0 {
        return (0.0, 1.0);
    }
    let lp = log_prefactor(a, x);
    if x < a + 1.0 {
        // P = x^a e^-x / Gamma(a+1) * sum_n x^n / ((a+1)...(a+n)).
        let mut term = 1.0;
        let mut sum = 1.0;
        for n in 1..MAX_GAMMA_TERMS {
            term *= x / (a + n as f64);
            sum += term;
            if term < sum * 1e-17 {
                break;
            }
        }
        let p = (libm::exp(lp) * sum).clamp(0.0, 1.0);
        (p, 1.0 - p)
    } else {
        // Q = x^a e^-x / Gamma(a) * 1/(x+1-a- 1(1-a)/(x+3-a- ...)) (modified Lentz).
        let tiny = 1e-300;
        let mut b = x + 1.0 - a;
        let mut cc = 1.0 / tiny;
        let mut d = 1.0 / b;
        let mut h = d;
        for i in 1..MAX_GAMMA_TERMS {
            let an = -(i as f64) * (i as f64 - a);
            b += 2.0;
            d = an * d + b;
            if d.abs() < tiny {
                d = tiny;
            }
            cc = b + an / cc;
            if cc.abs() < tiny {
                cc = tiny;
            }
            d = 1.0 / d;
            let del = d * cc;
            h *= del;
            if (del - 1.0).abs() < 1e-16 {
                break;
            }
        }
        // x^a e^-x / Gamma(a) = a * x^a e^-x / Gamma(a+1).
        let q = (libm::exp(lp + libm::log(a)) * h).clamp(0.0, 1.0);
        (1.0 - q, q)
    }
}

/// Regularised lower incomplete gamma function P(a, x) = gamma(a, x) / Gamma(a), by its
/// series for x < a + 1 and the continued fraction of Q = 1 - P otherwise (Numerical
/// Recipes, 3rd ed. (2007), section 6.2: common practice), at most [`MAX_GAMMA_TERMS`] terms.
///
/// ```
/// use clockwright_core::estimate::gamma_p;
/// // P(1, x) = 1 - e^-x.
/// assert!((gamma_p(1.0, 2.0).unwrap() - (1.0 - (-2f64).exp())).abs() < 1e-15);
/// ```
pub fn gamma_p(a: f64, x: f64) -> Result<f64, InputError> {
    let mut c = Checker::new();
    c.above("a", a, 0.0, DOF_RANGE.1 / 2.0, "");
    c.range("x", x, 0.0, f64::MAX, "");
    c.finish()?;
    Ok(gamma_pq(a, x).0)
}

/// Chi-square cumulative distribution with `dof` degrees of freedom (need not be whole):
/// P(dof/2, x/2).
///
/// ```
/// use clockwright_core::estimate::chi2_cdf;
/// // Two degrees of freedom: 1 - e^(-x/2).
/// assert!((chi2_cdf(3.0, 2.0).unwrap() - (1.0 - (-1.5f64).exp())).abs() < 1e-15);
/// ```
pub fn chi2_cdf(x: f64, dof: f64) -> Result<f64, InputError> {
    let mut c = Checker::new();
    c.range("x", x, 0.0, f64::MAX, "");
    c.range("dof", dof, DOF_RANGE.0, DOF_RANGE.1, "");
    c.finish()?;
    Ok(gamma_pq(dof / 2.0, x / 2.0).0)
}

/// Normal quantile for a starting value (Abramowitz and Stegun 26.2.23, |error| < 4.5e-4).
fn normal_quantile_rough(p: f64) -> f64 {
    let (q, sign) = if p < 0.5 { (p, -1.0) } else { (1.0 - p, 1.0) };
    let t = libm::sqrt(-2.0 * libm::log(q));
    let z = t - (2.515517 + 0.802853 * t + 0.010328 * t * t) / (1.0 + 1.432788 * t + 0.189269 * t * t + 0.001308 * t * t * t);
    sign * z
}

fn chi2_quantile_unchecked(p: f64, dof: f64) -> f64 {
    let a = dof / 2.0;
    // Solve P(a, x/2) = p for p <= 1/2, Q(a, x/2) = 1 - p otherwise (no loss near 1).
    let upper = p > 0.5;
    let target = if upper { 1.0 - p } else { p };
    let resid = |x: f64| {
        let (pp, qq) = gamma_pq(a, x / 2.0);
        if upper {
            target - qq
        } else {
            pp - target
        }
    };
    // Both residuals increase with x. Wilson-Hilferty start (common practice).
    let z = normal_quantile_rough(p);
    let k = 2.0 / (9.0 * dof);
    let c3 = 1.0 - k + z * libm::sqrt(k);
    let wh = dof * c3 * c3 * c3;
    // Lower tail: P(a, x/2) ~ (x/2)^a / Gamma(a+1).
    let mut x = if wh > 0.0 { wh } else { 2.0 * libm::exp((libm::log(p) + libm::lgamma(a + 1.0)) / a) };
    if !(x.is_finite() && x > 0.0) {
        x = dof.max(1e-300);
    }
    // Bracket [lo, hi] with resid(lo) <= 0 <= resid(hi); at most 2100 doublings/halvings.
    let (mut lo, mut hi) = (x, x);
    let mut r = resid(x);
    if r == 0.0 {
        return x;
    }
    let mut steps = 0;
    if r < 0.0 {
        while resid(hi) < 0.0 && steps < 2100 {
            lo = hi;
            hi *= 2.0;
            steps += 1;
        }
    } else {
        while resid(lo) > 0.0 && steps < 2100 && lo > 1e-300 {
            hi = lo;
            lo /= 2.0;
            steps += 1;
        }
    }
    // Safeguarded Newton with the density, at most 200 iterations.
    for _ in 0..200 {
        r = resid(x);
        if r == 0.0 {
            return x;
        }
        if r < 0.0 {
            lo = x;
        } else {
            hi = x;
        }
        // chi-square density at x: exp((a-1) ln(x/2) - x/2 - lgamma(a)) / 2
        //   = exp(log_prefactor(a, x/2)) * a / x.
        let dens = libm::exp(log_prefactor(a, x / 2.0)) * a / x;
        let mut next = if dens > 0.0 && dens.is_finite() { x - r / dens } else { f64::NAN };
        if !(next > lo && next < hi) {
            next = 0.5 * (lo + hi);
        }
        if (next - x).abs() <= 4.0 * f64::EPSILON * x || hi - lo <= 4.0 * f64::EPSILON * hi {
            return next;
        }
        x = next;
    }
    x
}

/// Quantile of the chi-square distribution: the x with chi2_cdf(x, dof) = p; p within
/// [1e-12, 1 - 1e-12], dof within [`DOF_RANGE`]. Relative accuracy about 1e-13 (checked
/// against scipy.stats.chi2.ppf by tests/reference/estimators.py).
///
/// ```
/// use clockwright_core::estimate::chi2_quantile;
/// // Two degrees of freedom: x = -2 ln(1 - p).
/// let x = chi2_quantile(0.9, 2.0).unwrap();
/// assert!((x - (-2.0 * 0.1f64.ln())).abs() < 1e-12);
/// ```
pub fn chi2_quantile(p: f64, dof: f64) -> Result<f64, InputError> {
    let mut c = Checker::new();
    c.range("p", p, 1e-12, 1.0 - 1e-12, "");
    c.range("dof", dof, DOF_RANGE.0, DOF_RANGE.1, "");
    c.finish()?;
    Ok(chi2_quantile_unchecked(p, dof))
}
