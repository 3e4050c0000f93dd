//! Cycle-by-cycle simulation of the clock's closed loop: the laser's frequency during each
//! probe, the atoms' full two-level propagation, binomial projection with detection errors,
//! a two-point lock with an integrating servo, and the corrected laser frequency per cycle.
//! It shows where the linear budget of [`crate::budget`] breaks down (fringe hops when the
//! probe is too long for the laser).
//!
//! # The cycle
//!
//! One cycle is the probe (the design's pulses and free evolution, first pulse to last)
//! followed by the rest of the cycle (dead time). The probe is cut into intervals: each
//! pulse into [`SimOptions::pulse_substeps`] equal sub-steps, each free segment into one.
//! On each interval the laser's detuning is its average over the interval, and the Bloch
//! vector is carried by the exact propagator of [`Generator::propagator`] (rotation, with
//! decay when the transition has a lifetime), applied to the vector directly with the parts
//! that do not depend on the detuning computed once per run (checked against the general
//! propagator on random cases in the unit tests). For free evolution this is exact for any
//! frequency path: free evolution is a rotation about z by the integrated phase (and the
//! decay does not depend on the detuning). For a pulse it is exact when the frequency is
//! constant over the sub-step; more sub-steps follow a faster-varying laser.
//!
//! Cycles alternate between the two sides of the line, detuning +nu_op and -nu_op (the
//! design's operating point, [`operating_point`]). The excitation P of the atoms is read with
//! the design's detection errors (majority vote, [`Readout`]): every atom is independently
//! read "excited" with probability P' = e_g + (1 - e_g - e_e) P, so the count is
//! Binomial(N, P') (a GHZ state is one two-level system read once, N = 1; a squeezed state
//! scales the binomial fluctuation by xi). After each cycle the servo forms the error from
//! the last two cycles, e = s (m_i - m_(i-1)) / (2 S) in Hz (s the side of cycle i, S the
//! slope of the measured line at +nu_op), and corrects the laser by -g e with
//! g = T_c / T_s (T_c the cycle, T_s the attack time): a discrete integrator whose response
//! time is T_s, as the budget's first-order loop H(f) = 1/(1 + i 2 pi f T_s) (common practice).
//! An optional second integrator (gain g^2/4, critically damped; common practice) removes the
//! lag that a linear drift leaves behind the first.
//!
//! # The laser's noise, streaming
//!
//! The free laser's fractional frequency y(t) is made from the design's spectrum
//! ([`Spectrum`]) with memory that does not grow with the run, as a sum of independent
//! Gaussian processes, each advanced exactly in distribution over each interval by the
//! joint law of its end value and its integral:
//!
//! - white FM (h_0): the integral over L is Gaussian with variance h_0 L / 2;
//! - random-walk FM (h_-2): a Wiener process with diffusion D = 2 pi^2 h_-2 (so that
//!   sigma_y^2(tau) = D tau / 3 = (2 pi^2 / 3) h_-2 tau, IEEE Std 1139-2008);
//! - flicker FM (h_-1): a bank of Ornstein-Uhlenbeck processes (first-order Gauss-Markov)
//!   with corner frequencies f_k two per decade, from 0.1 / (run length) up, each of
//!   variance h_-1 ln(10)/2: their Lorentzian spectra sum to h_-1 / f between the end
//!   poles, with a ripple below 1e-3 (the sum is a Riemann sum of 1/(2 cosh u) in log f;
//!   Poisson summation bounds the ripple by 4 exp(-pi^2 / (ln(10)/2))). Poles whose
//!   correlation time is below a tenth of the shortest interval are merged into white FM at
//!   their low-frequency level 2 sigma_k^2 / (pi f_k);
//! - white PM (h_2, cut-off f_h): an Ornstein-Uhlenbeck phase x(t) with corner f_h and
//!   variance h_2 f_h / (4 pi^2), whose Allan variance for tau >> 1/f_h is 3 f_h h_2 /
//!   (4 pi^2 tau^2), the IEEE Std 1139-2008 form; the integral of y over an interval is the
//!   phase difference across it;
//! - flicker PM (h_1): a bank of phase Ornstein-Uhlenbeck processes, two per decade, up to
//!   f_h (same phase variance as the sharp cut-off);
//! - a tabulated spectrum: a bank of frequency and phase Ornstein-Uhlenbeck processes on the
//!   same grid (up to f_h) whose weights are fitted to the table by multiplicative
//!   non-negative updates; the largest relative misfit at the fit frequencies is reported;
//! - the linear drift, exactly.
//!
//! The processes advanced over every interval (white FM and the Ornstein-Uhlenbeck
//! processes faster than the cycle) are drawn together once per cycle, exactly in
//! distribution: the interval integrals and the end states are jointly Gaussian given the
//! start states, with a covariance composed once from the exact one-interval steps and
//! factored by Cholesky, so a cycle costs one normal deviate per interval and per process
//! instead of two per process and interval (`JointBank`; checked against the
//! Ornstein-Uhlenbeck covariance in closed form and against the literal small-step
//! recursion in the unit tests). Above [`JOINT_MAX_DIM`] intervals plus processes they are
//! advanced interval by interval.
//!
//! Processes slower than the cycle are advanced once per cycle (exactly: end value and
//! cycle average) and taken as constant over it; those slower than [`SLOW_RATIO`] cycles once
//! per block of 2^j cycles (constant over the block, exact block average). Their variation
//! within a cycle is of relative order T_c / tau_k and lies far below the cycle rate, where
//! the probe barely aliases. Faster processes are advanced over every interval. The free
//! laser's Allan deviation from these series matches the IEEE Std 1139-2008 forms within the
//! estimator's confidence interval (tests/simulate.rs).
//!
//! # Random numbers
//!
//! The atoms draw from one stream and the laser from another (both xoshiro256**,
//! [`Rng`]; the laser's normal deviates by the ziggurat method, [`Ziggurat`], those of the
//! joint draw two from each 64 random bits), derived from the seed: the same seed gives the
//! same run on every platform. (The joint draw changed the laser's stream: a seed gives a
//! different run than before it, with the same statistics.)
//! Binomial deviates for any N up to [`crate::design::caps::MAX_ATOMS`] come from
//! [`binomial`]: direct Bernoulli counting for N <= 16, else the recursive beta splitting of
//! The Art of Computer Programming, Vol. 2, 3rd ed. (1997), section 3.4.1 (the a-th smallest
//! of N uniforms is Beta(a, N + 1 - a); the count below p then splits into a smaller binomial
//! on either side), with gamma deviates by ACM Trans. Math. Softw. 26, 363 (2000). It is
//! exact in distribution; each level halves N, so at most 23 levels for 1e8 atoms.
//!
//! # Fringe hops
//!
//! A cycle counts as a phase excursion when the laser's phase error accumulated over the
//! probe (relative to the intended detuning, N-fold for GHZ) exceeds pi in magnitude, and
//! as off the central fringe when the laser's mean frequency error over the probe lies
//! beyond the edge of the central feature (its first extremum away from line centre): the
//! lock then sits on a neighbouring fringe.

use crate::budget::evaluate;
use crate::design::{Design, Entanglement};
use crate::error::{show, Checker, InputError};
use crate::estimate::{estimate, Estimate, Estimator, Options, Taus};
use crate::noise::Spectrum;
use crate::projection::{operating_point, Operating, Readout};
use crate::result::EvalOptions;
use crate::sequence::{Generator, Probe, Step, GROUND};
use crate::synthesis::Rng;
use serde::{Deserialize, Serialize};
use std::f64::consts::{LN_10, PI};

/// Largest number of recorded cycles in one run (two series of 8 bytes per cycle are kept
/// for the estimators: 160 MB at this cap).
pub const MAX_CYCLES: u64 = 10_000_000;
/// Largest number of settling cycles before recording starts.
pub const MAX_SETTLE_CYCLES: u64 = 10_000_000;
/// Fewest recorded cycles (the Allan deviation needs a few averaging factors).
pub const MIN_CYCLES: u64 = 16;
/// Largest number of sub-steps per pulse.
pub const MAX_PULSE_SUBSTEPS: u32 = 256;
/// Largest number of intervals (sub-steps and free segments) summed over the whole run,
/// settling included: bounds the work of one run.
pub const MAX_TOTAL_INTERVALS: u64 = 2_000_000_000;
/// Longest simulated time, s (settling included).
pub const MAX_RUN_S: f64 = 1e9;
/// Largest seed (2^53 - 1, so that it survives a JavaScript number unchanged).
pub const MAX_SEED: u64 = (1 << 53) - 1;
/// Largest number of cycles whose details are kept in [`SimResult::trace`].
pub const MAX_TRACE: u32 = 100_000;
/// Most Ornstein-Uhlenbeck processes of one kind (frequency or phase) in the laser model.
pub const MAX_POLES: usize = 96;
/// Processes with a correlation time above this many cycles are advanced in blocks of
/// 2^j cycles (at most correlation time / SLOW_RATIO long).
pub const SLOW_RATIO: f64 = 64.0;
/// Corner frequencies of the Ornstein-Uhlenbeck banks per decade.
pub const POLES_PER_DECADE: f64 = 2.0;
/// Multiplicative updates of the fit of a tabulated spectrum.
pub const TABLE_FIT_ITERATIONS: usize = 400;
/// Confidence level of the interval used to flag a departure from the analytic curve (a
/// point outside a 68 % interval is common by chance; outside 99.9 % it is not).
pub const FLAG_CONFIDENCE: f64 = 0.999;
/// Relative allowance for the analytic budget's continuous first-order loop, which differs
/// from the sampled two-point loop simulated here by up to about 7 % near the attack time
/// (measured on the demo designs whose probe phase excursion stays below 0.2 rad): a
/// departure is flagged when the analytic value lies outside the flag interval widened by
/// this factor on both sides.
pub const MODEL_TOLERANCE: f64 = 0.10;

/// Options of a simulation run (all optional in JSON).
///
/// ```
/// use clockwright_core::simulate::SimOptions;
/// let o: SimOptions = serde_json::from_str(r#"{"cycles": 5000, "seed": 3}"#).unwrap();
/// assert_eq!(o.cycles, 5000);
/// assert_eq!(o.pulse_substeps, SimOptions::default().pulse_substeps);
/// ```
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct SimOptions {
    /// Cycles recorded after settling, [`MIN_CYCLES`] to [`MAX_CYCLES`].
    pub cycles: u64,
    /// Cycles run before recording starts, so the lock has acquired; `None`: ten attack times.
    pub settle_cycles: Option<u64>,
    /// Seed of the random streams, 0 to [`MAX_SEED`].
    pub seed: u64,
    /// Sub-steps per pulse, 1 to [`MAX_PULSE_SUBSTEPS`].
    pub pulse_substeps: u32,
    /// Adds a second integrator to the servo (removes the lag of a linear drift).
    pub second_integrator: bool,
    /// The free laser's noise (false: a noiseless laser, for checks; its drift stays).
    pub laser_noise: bool,
    /// Frequency error of the laser at the start, Hz (a step for the servo to remove).
    pub initial_offset_hz: f64,
    /// Two-sided confidence level of the intervals.
    pub confidence: f64,
    /// Number of cycles (from the first, settling included) whose details are returned.
    pub trace_cycles: u32,
}

impl Default for SimOptions {
    fn default() -> Self {
        SimOptions {
            cycles: 100_000,
            settle_cycles: None,
            seed: 1,
            pulse_substeps: 4,
            second_integrator: false,
            laser_noise: true,
            initial_offset_hz: 0.0,
            confidence: 0.683,
            trace_cycles: 0,
        }
    }
}

/// Where a run stands after [`Simulation::advance`].
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Progress {
    /// Cycles run so far, settling included.
    pub cycles_done: u64,
    /// Cycles of the whole run, settling included.
    pub cycles_total: u64,
    /// cycles_done / cycles_total.
    pub fraction: f64,
    /// Simulated time so far, s.
    pub simulated_s: f64,
    /// Cycles so far whose laser phase excursion over the probe exceeded pi.
    pub phase_excursion_cycles: u64,
    /// Cycles so far locked off the central fringe.
    pub off_fringe_cycles: u64,
    /// True when every cycle has run.
    pub finished: bool,
}

/// One cycle's details (for checks and plots).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CycleRecord {
    /// Cycle number from 0, settling included.
    pub cycle: u64,
    /// Side of the line probed: +1 or -1.
    pub side: i32,
    /// Excitation probability of each atom at the end of the probe.
    pub excitation: f64,
    /// Fraction of atoms read "excited".
    pub measured: f64,
    /// Servo correction applied during this cycle, Hz.
    pub correction_hz: f64,
    /// Mean frequency error of the laser over the probe (free laser plus correction), Hz.
    pub error_hz: f64,
    /// Laser phase error accumulated over the probe, rad (N-fold for GHZ).
    pub phase_excursion_rad: f64,
}

/// The analytic budget at the simulation's averaging times.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct AnalyticOverlay {
    pub tau_s: Vec<f64>,
    /// Allan deviation of the locked laser ([`crate::evaluate`]).
    pub total: Vec<f64>,
    /// Allan deviation of the free-running laser, drift included.
    pub free_laser: Vec<f64>,
}

/// An averaging time where the simulated locked laser departs from the analytic curve
/// beyond its confidence interval: the analytic value lies outside
/// [ci_low / (1 + [`MODEL_TOLERANCE`]), ci_high (1 + [`MODEL_TOLERANCE`])], the interval at
/// [`FLAG_CONFIDENCE`] from the point's EDF.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Departure {
    pub tau_s: f64,
    pub simulated: f64,
    pub ci_low: f64,
    pub ci_high: f64,
    pub analytic: f64,
    /// Why, in a short sentence.
    pub reason: String,
}

/// Counts of the nonlinear events of the run (recorded cycles only).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FringeSummary {
    /// Cycles whose laser phase excursion over the probe exceeded pi.
    pub phase_excursion_cycles: u64,
    /// Cycles locked off the central fringe.
    pub off_fringe_cycles: u64,
    /// First recorded cycle off the central fringe.
    pub first_off_fringe_cycle: Option<u64>,
    /// Edge of the central feature, Hz (the off-fringe threshold).
    pub edge_hz: f64,
    /// RMS phase excursion of the free laser over the probe from the analytic model, rad.
    pub analytic_phase_rms_rad: f64,
}

/// How the laser noise was represented.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct NoiseSummary {
    /// Ornstein-Uhlenbeck processes of the frequency and of the phase.
    pub frequency_processes: usize,
    pub phase_processes: usize,
    /// Lowest corner frequency of the banks, Hz.
    pub lowest_corner_hz: f64,
    /// White FM level used, h_0 in 1/Hz (merged fast processes included).
    pub white_h0: f64,
    /// Largest relative misfit of the tabulated spectrum at the fit frequencies (None without a table).
    pub table_fit_error: Option<f64>,
}

/// Result of a run.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SimResult {
    pub design_name: String,
    /// Cycles recorded (after settling).
    pub cycles: u64,
    pub settle_cycles: u64,
    pub cycle_time_s: f64,
    pub seed: u64,
    /// Overlapping Allan deviation of the locked laser with confidence intervals.
    pub locked: Estimate,
    /// Overlapping Allan deviation of the free-running laser (same cycles).
    pub free_laser: Estimate,
    pub analytic: AnalyticOverlay,
    pub departures: Vec<Departure>,
    pub fringe: FringeSummary,
    pub noise: NoiseSummary,
    /// Findings in sentences.
    pub notes: Vec<String>,
    pub trace: Vec<CycleRecord>,
}

// ---------------------------------------------------------------------------------------
// Random deviates

/// Gamma(shape, 1) deviate for shape >= 1 (ACM Trans. Math. Softw. 26, 363 (2000)); the
/// rejection loop accepts with probability above 0.95 and is capped at 10 000 rounds (never
/// reached in practice; the mean is returned then).
fn gamma_deviate(rng: &mut Rng, shape: f64) -> f64 {
    let d = shape - 1.0 / 3.0;
    let c = 1.0 / libm::sqrt(9.0 * d);
    for _ in 0..10_000 {
        let x = rng.gaussian();
        let t = 1.0 + c * x;
        if t <= 0.0 {
            continue;
        }
        let v = t * t * t;
        let u = rng.uniform();
        let x2 = x * x;
        if u < 1.0 - 0.0331 * x2 * x2 {
            return d * v;
        }
        if u > 0.0 && libm::log(u) < 0.5 * x2 + d * (1.0 - v + libm::log(v)) {
            return d * v;
        }
    }
    shape
}

/// Binomial(n, p) deviate, exact in distribution for any n (module docs: Bernoulli counting
/// for n <= 16, recursive beta splitting above). `p` outside [0, 1] is clamped.
///
/// ```
/// use clockwright_core::simulate::binomial;
/// use clockwright_core::synthesis::Rng;
/// let mut rng = Rng::new(1);
/// let k = binomial(&mut rng, 1000, 0.25);
/// assert!(k <= 1000);
/// assert_eq!(binomial(&mut rng, 10, 0.0), 0);
/// assert_eq!(binomial(&mut rng, 10, 1.0), 10);
/// ```
pub fn binomial(rng: &mut Rng, n: u64, p: f64) -> u64 {
    let mut p = if p.is_nan() { 0.0 } else { p.clamp(0.0, 1.0) };
    let mut n = n;
    let mut count = 0u64;
    // Each round at least halves n: at most 64 rounds.
    for _ in 0..64 {
        if n == 0 || p <= 0.0 {
            return count;
        }
        if p >= 1.0 {
            return count + n;
        }
        if n <= 16 {
            for _ in 0..n {
                if rng.uniform() < p {
                    count += 1;
                }
            }
            return count;
        }
        let a = 1 + n / 2;
        let b = n + 1 - a;
        let ga = gamma_deviate(rng, a as f64);
        let gb = gamma_deviate(rng, b as f64);
        let x = ga / (ga + gb);
        if x >= p {
            // The a-th smallest uniform lies above p: the count is among the a - 1 below it,
            // uniform on [0, x).
            n = a - 1;
            p /= x;
        } else {
            // a uniforms lie below p; the n - a above x are uniform on (x, 1).
            count += a;
            n -= a;
            p = (p - x) / (1.0 - x);
        }
    }
    count
}


/// Standard normal deviates by the ziggurat method with 128 layers (J. Stat. Softw. 5,
/// issue 8 (2000)), tables built with `libm` so every platform draws the same numbers. Used
/// for the laser noise, where tens of deviates are drawn per cycle; exact in distribution
/// (the wedges and the tail beyond r = 3.4426 are sampled by rejection).
#[derive(Debug, Clone)]
pub struct Ziggurat {
    kn: [u32; 128],
    wn: [f64; 128],
    fh: [f64; 128],
}

impl Default for Ziggurat {
    fn default() -> Self {
        Ziggurat::new()
    }
}

impl Ziggurat {
    const R: f64 = 3.442619855899;
    /// Builds the layer tables.
    pub fn new() -> Ziggurat {
        let m1 = 2147483648.0;
        let vn = 9.91256303526217e-3;
        let mut dn = Self::R;
        let mut tn = dn;
        let q = vn / libm::exp(-0.5 * dn * dn);
        let mut kn = [0u32; 128];
        let mut wn = [0.0; 128];
        let mut fh = [0.0; 128];
        kn[0] = ((dn / q) * m1) as u32;
        kn[1] = 0;
        wn[0] = q / m1;
        wn[127] = dn / m1;
        fh[0] = 1.0;
        fh[127] = libm::exp(-0.5 * dn * dn);
        for i in (1..=126).rev() {
            dn = libm::sqrt(-2.0 * libm::log(vn / dn + libm::exp(-0.5 * dn * dn)));
            kn[i + 1] = ((dn / tn) * m1) as u32;
            tn = dn;
            fh[i] = libm::exp(-0.5 * dn * dn);
            wn[i] = dn / m1;
        }
        Ziggurat { kn, wn, fh }
    }

    /// One standard normal deviate.
    ///
    /// ```
    /// use clockwright_core::simulate::Ziggurat;
    /// use clockwright_core::synthesis::Rng;
    /// let z = Ziggurat::new();
    /// let mut rng = Rng::new(3);
    /// let n = 100_000;
    /// let v: Vec<f64> = (0..n).map(|_| z.normal(&mut rng)).collect();
    /// let mean = v.iter().sum::<f64>() / n as f64;
    /// let var = v.iter().map(|x| x * x).sum::<f64>() / n as f64;
    /// assert!(mean.abs() < 0.02 && (var - 1.0).abs() < 0.02);
    /// ```
    #[inline]
    pub fn normal(&self, rng: &mut Rng) -> f64 {
        self.deviate((rng.next_u64() >> 32) as u32 as i32, rng)
    }

    /// Fills `out` with standard normal deviates, two from each 64 random bits: each half
    /// is one 32-bit draw of the method (xoshiro256** has no weak low bits: ACM Trans. Math.
    /// Softw. 47, 36 (2021)); a half that falls outside the rectangles continues with fresh
    /// draws. Exact in distribution like [`Ziggurat::normal`], not the same stream.
    ///
    /// ```
    /// use clockwright_core::simulate::Ziggurat;
    /// use clockwright_core::synthesis::Rng;
    /// let z = Ziggurat::new();
    /// let mut rng = Rng::new(5);
    /// let mut v = vec![0.0; 100_001];
    /// z.fill(&mut rng, &mut v);
    /// let n = v.len() as f64;
    /// let mean = v.iter().sum::<f64>() / n;
    /// let var = v.iter().map(|x| x * x).sum::<f64>() / n;
    /// assert!(mean.abs() < 0.02 && (var - 1.0).abs() < 0.02);
    /// ```
    #[inline]
    pub fn fill(&self, rng: &mut Rng, out: &mut [f64]) {
        let mut pairs = out.chunks_exact_mut(2);
        for pair in &mut pairs {
            let u = rng.next_u64();
            pair[0] = self.deviate((u >> 32) as u32 as i32, rng);
            pair[1] = self.deviate(u as u32 as i32, rng);
        }
        if let [last] = pairs.into_remainder() {
            *last = self.normal(rng);
        }
    }

    /// The deviate of the 32 random bits `hz`: inside a rectangle at once (about 99 % of
    /// draws), else by rejection (`slow`).
    #[inline(always)]
    fn deviate(&self, hz: i32, rng: &mut Rng) -> f64 {
        let iz = (hz & 127) as usize;
        if hz.unsigned_abs() < self.kn[iz] {
            return hz as f64 * self.wn[iz];
        }
        self.slow(hz, rng)
    }

    /// The wedges and the tail: rejection, each round accepting with probability above
    /// 0.98, capped at 10 000 rounds.
    #[cold]
    #[inline(never)]
    fn slow(&self, hz: i32, rng: &mut Rng) -> f64 {
        let mut hz = hz;
        let mut iz = (hz & 127) as usize;
        for _ in 0..10_000 {
            let x = hz as f64 * self.wn[iz];
            if iz == 0 {
                for _ in 0..10_000 {
                    let u1 = ((rng.next_u64() >> 11) + 1) as f64 * (1.0 / (1u64 << 53) as f64);
                    let u2 = ((rng.next_u64() >> 11) + 1) as f64 * (1.0 / (1u64 << 53) as f64);
                    let t = -libm::log(u1) / Self::R;
                    let y = -libm::log(u2);
                    if y + y >= t * t {
                        return if hz > 0 { Self::R + t } else { -Self::R - t };
                    }
                }
                return if hz > 0 { Self::R } else { -Self::R };
            }
            if self.fh[iz] + rng.uniform() * (self.fh[iz - 1] - self.fh[iz]) < libm::exp(-0.5 * x * x) {
                return x;
            }
            hz = (rng.next_u64() >> 32) as u32 as i32;
            iz = (hz & 127) as usize;
            if hz.unsigned_abs() < self.kn[iz] {
                return hz as f64 * self.wn[iz];
            }
        }
        0.0
    }
}

// ---------------------------------------------------------------------------------------
// The streaming laser

/// Exact one-interval step of an Ornstein-Uhlenbeck process of variance sigma^2 and
/// correlation time tau over a length L: x' = a x + s1 g1, J = m x + k (x' - a x) + sj g2,
/// with a = exp(-L/tau), J the integral over the interval.
#[derive(Debug, Clone, Copy)]
struct OuStep {
    a: f64,
    s1: f64,
    m: f64,
    k: f64,
    sj: f64,
}

impl OuStep {
    fn new(var: f64, tau: f64, len: f64) -> OuStep {
        let x = len / tau;
        let one_minus_a = -libm::expm1(-x);
        let a = 1.0 - one_minus_a;
        let one_minus_a2 = -libm::expm1(-2.0 * x);
        let sigma = libm::sqrt(var);
        // Conditional variance of the integral given both ends: var tau^2 f(x) with
        // f = 2x - 3 + 4a - a^2 - (1-a)^3/(1+a) = x^3/6 - x^5/60 + 17 x^7/10080 - ...
        let f = if x < 0.02 {
            let x2 = x * x;
            x * x2 * (1.0 / 6.0 - x2 / 60.0 + 17.0 * x2 * x2 / 10080.0)
        } else {
            2.0 * x - 3.0 + 4.0 * a - a * a - one_minus_a * one_minus_a * one_minus_a / (1.0 + a)
        };
        OuStep { a, s1: sigma * libm::sqrt(one_minus_a2), m: tau * one_minus_a, k: tau * one_minus_a / (1.0 + a), sj: sigma * tau * libm::sqrt(f.max(0.0)) }
    }
    /// Advances `x` and returns the integral over the interval.
    #[inline]
    fn advance(&self, x: &mut f64, rng: &mut Rng, z: &Ziggurat) -> f64 {
        let d = self.s1 * z.normal(rng);
        let j = self.m * *x + self.k * d + self.sj * z.normal(rng);
        *x = self.a * *x + d;
        j
    }
}

#[derive(Debug, Clone)]
enum Pace {
    /// Advanced over every interval (one step per interval).
    Interval(Vec<OuStep>),
    /// Advanced once per block of `cycles` cycles, constant over it.
    Block { step: OuStep, cycles: u64, left: u64, mean: f64 },
}

#[derive(Debug, Clone)]
struct FreqProcess {
    x: f64,
    pace: Pace,
}

#[derive(Debug, Clone)]
enum PhasePace {
    /// Updated at the end of every interval: (a, s) of x' = a x + s g.
    Interval(Vec<(f64, f64)>),
    /// Updated once per cycle, at the end of the last interval.
    Cycle(f64, f64),
}

#[derive(Debug, Clone)]
struct PhaseProcess {
    x: f64,
    pace: PhasePace,
}

/// The processes advanced over every interval (white FM and the frequency and phase
/// Ornstein-Uhlenbeck processes faster than the cycle), drawn together once per cycle,
/// exactly in distribution.
///
/// Given the processes' states s at the start of the cycle, the vector v = (J_1 .. J_n,
/// s'_1 .. s'_K) of the summed integrals of y over the n intervals and the K states at the
/// end of the cycle is Gaussian with mean F s (each state's own column; the end states'
/// rows are diagonal, A) and a covariance Sigma that does not depend on s: the exact
/// one-interval steps ([`OuStep`]; the phase steps x' = a x + s g with J = x' - x) are linear
/// in the start state and their own normal deviates, so composing them over the cycle gives
/// each deviate's column of coefficients g on v, and Sigma is the sum of g g^T over all
/// deviates (processes driven by independent noises add), plus h_0 L_i / 2 on the diagonal
/// for white FM. Sigma is factored once, Sigma = L L^T (Cholesky); each cycle draws
/// v = F s + L z with n + K standard normal deviates z, instead of two per process and
/// interval. The factorisation is a semidefinite one: a pivot below [`JOINT_PIVOT_FLOOR`]
/// times its diagonal entry (a direction the processes cannot move, such as the sum of the
/// phase increments given the end state when there is no white FM) is set to zero, which
/// changes the variances by at most that fraction.
#[derive(Debug, Clone)]
struct JointBank {
    n: usize,
    k: usize,
    /// Mean of J given the states, n x K, row-major.
    f: Vec<f64>,
    /// Mean of each end state given its start state (product of the interval factors).
    a: Vec<f64>,
    /// Cholesky factor of Sigma, lower triangle packed by rows (row j holds j + 1 values).
    l: Vec<f64>,
    /// The states.
    x: Vec<f64>,
    /// Scratch: the cycle's deviates z.
    z: Vec<f64>,
}

/// Largest n + K for which the fast processes are drawn jointly (`JointBank`); above it
/// (very many pulse sub-steps) the per-interval recursion is cheaper: the joint draw costs
/// about (n + K)^2 / 2 multiplications, the recursion about two normal deviates per process
/// and interval.
pub const JOINT_MAX_DIM: usize = 128;
/// Relative pivot floor of the semidefinite Cholesky factorisation of `JointBank`.
pub const JOINT_PIVOT_FLOOR: f64 = 1e-13;

impl JointBank {
    /// `freq`: (start state, one-interval steps) of the frequency processes; `phase`: (start
    /// state, (a, s) per interval) of the phase processes; `white_var`: white FM variance of
    /// the integral over each interval, s^2.
    fn new(freq: &[(f64, Vec<OuStep>)], phase: &[(f64, Vec<(f64, f64)>)], white_var: &[f64]) -> JointBank {
        let n = white_var.len();
        let k = freq.len() + phase.len();
        let dim = n + k;
        let mut f = vec![0.0; n * k];
        let mut a = vec![0.0; k];
        let mut x = Vec::with_capacity(k);
        let mut sigma = vec![0.0; dim * dim];
        for (i, &v) in white_var.iter().enumerate() {
            sigma[i * dim + i] += v;
        }
        let mut g = vec![0.0; dim];
        let add = |g: &[f64], from: usize, state: usize, sigma: &mut Vec<f64>| {
            // Rank-one update with the column g, nonzero only on J_from.. and the state row.
            let idx: Vec<usize> = (from..n).chain(std::iter::once(state)).collect();
            for &p in &idx {
                for &q in &idx {
                    sigma[p * dim + q] += g[p] * g[q];
                }
            }
        };
        for (j, (x0, steps)) in freq.iter().enumerate() {
            let row = n + j;
            x.push(*x0);
            // Mean: J_i = m_i x_(i-1), x_i = a_i x_(i-1).
            let mut c = 1.0;
            for (i, st) in steps.iter().enumerate() {
                f[i * k + j] = st.m * c;
                c *= st.a;
            }
            a[j] = c;
            for l in 0..n {
                // The deviate d_l = s1 g1 of interval l: J_l gets k s1, the state s1, and
                // the later intervals m_i times the state's coefficient.
                g.iter_mut().for_each(|v| *v = 0.0);
                let st = &steps[l];
                g[l] = st.k * st.s1;
                let mut c = st.s1;
                for (i, st) in steps.iter().enumerate().skip(l + 1) {
                    g[i] = st.m * c;
                    c *= st.a;
                }
                g[row] = c;
                add(&g, l, row, &mut sigma);
                // The deviate g2 of interval l enters J_l alone.
                sigma[l * dim + l] += st.sj * st.sj;
            }
        }
        for (jp, (x0, steps)) in phase.iter().enumerate() {
            let j = freq.len() + jp;
            let row = n + j;
            x.push(*x0);
            // Mean: J_i = x_i - x_(i-1) = (a_i - 1) x_(i-1).
            let mut c = 1.0;
            for (i, &(ai, _)) in steps.iter().enumerate() {
                f[i * k + j] = (ai - 1.0) * c;
                c *= ai;
            }
            a[j] = c;
            for l in 0..n {
                g.iter_mut().for_each(|v| *v = 0.0);
                let sl = steps[l].1;
                g[l] = sl;
                let mut c = sl;
                for (i, &(ai, _)) in steps.iter().enumerate().skip(l + 1) {
                    g[i] = (ai - 1.0) * c;
                    c *= ai;
                }
                g[row] = c;
                add(&g, l, row, &mut sigma);
            }
        }
        JointBank { n, k, f, a, l: cholesky_semidefinite(&sigma, dim), x, z: vec![0.0; dim] }
    }

    /// Adds the cycle's integrals to `out` (n entries) and advances the states.
    #[inline]
    fn draw(&mut self, out: &mut [f64], rng: &mut Rng, zig: &Ziggurat) {
        let (n, k) = (self.n, self.k);
        zig.fill(rng, &mut self.z);
        let mut pos = 0;
        // (`out` shorter than the layout: the intervals beyond it are drawn and dropped.)
        for j in 0..n {
            let w = dot(&self.l[pos..pos + j + 1], &self.z[..j + 1]);
            pos += j + 1;
            if let Some(o) = out.get_mut(j) {
                *o += dot(&self.f[j * k..(j + 1) * k], &self.x) + w;
            }
        }
        // The J rows above have used the start states; now they are replaced.
        for jj in 0..k {
            let j = n + jj;
            let w = dot(&self.l[pos..pos + j + 1], &self.z[..j + 1]);
            pos += j + 1;
            self.x[jj] = self.a[jj] * self.x[jj] + w;
        }
    }
}

#[inline]
fn dot(a: &[f64], b: &[f64]) -> f64 {
    let mut s = 0.0;
    for (x, y) in a.iter().zip(b) {
        s += x * y;
    }
    s
}

/// Lower Cholesky factor of the symmetric positive semidefinite `dim` x `dim` matrix `s`
/// (row-major), packed by rows; pivots below [`JOINT_PIVOT_FLOOR`] times their diagonal
/// entry (or not positive) give a zero column (JointBank docs).
fn cholesky_semidefinite(s: &[f64], dim: usize) -> Vec<f64> {
    let mut l = vec![0.0; dim * dim];
    for j in 0..dim {
        let mut d = s[j * dim + j];
        for p in 0..j {
            d -= l[j * dim + p] * l[j * dim + p];
        }
        let floor = JOINT_PIVOT_FLOOR * s[j * dim + j];
        if d.is_nan() || d <= floor.max(0.0) {
            continue;
        }
        let dj = libm::sqrt(d);
        l[j * dim + j] = dj;
        for i in j + 1..dim {
            let mut v = s[i * dim + j];
            for p in 0..j {
                v -= l[i * dim + p] * l[j * dim + p];
            }
            l[i * dim + j] = v / dj;
        }
    }
    let mut packed = Vec::with_capacity(dim * (dim + 1) / 2);
    for i in 0..dim {
        packed.extend_from_slice(&l[i * dim..i * dim + i + 1]);
    }
    packed
}

/// The free laser's fractional frequency, streamed cycle by cycle as integrals over the
/// intervals of a fixed cycle layout (module docs for the model).
#[derive(Debug, Clone)]
pub struct LaserStream {
    layout: Vec<f64>,
    cycle_s: f64,
    white_sd: Vec<f64>,
    joint: Option<JointBank>,
    wiener: Option<(f64, f64, f64)>,
    w: f64,
    freq: Vec<FreqProcess>,
    phase: Vec<PhaseProcess>,
    drift: f64,
    t0: f64,
    rng: Rng,
    zig: Ziggurat,
    summary: NoiseSummary,
}

/// Exact step of a phase Ornstein-Uhlenbeck process of variance `v` and correlation time
/// `tau` over `l`: (a, s) of x' = a x + s g, a = exp(-l/tau), s^2 = v (1 - a^2).
fn phase_step(v: f64, tau: f64, l: f64) -> (f64, f64) {
    let a = libm::exp(-l / tau);
    (a, libm::sqrt(v * -libm::expm1(-2.0 * l / tau)))
}

/// Lorentzian spectrum of a frequency OU process of unit variance and corner `fk`, 1/Hz.
fn lorentz_freq(f: f64, fk: f64) -> f64 {
    let r = f / fk;
    2.0 / (PI * fk) / (1.0 + r * r)
}

/// S_y of a phase OU process of unit phase variance (s^2) and corner `fk`, 1/Hz.
fn lorentz_phase(f: f64, fk: f64) -> f64 {
    let w = 2.0 * PI * f;
    w * w * lorentz_freq(f, fk)
}

impl LaserStream {
    /// Builds the stream for `spectrum` (and a linear drift `drift_per_s`, 1/s) over cycles
    /// cut into intervals of the durations `layout` (s, summing to the cycle), for a run of
    /// `run_s` seconds, seeded by `seed`.
    ///
    /// The processes faster than the cycle and white FM are drawn jointly once per cycle
    /// (`JointBank`) when their number plus the number of intervals is at most
    /// [`JOINT_MAX_DIM`], else interval by interval; the two ways are the same in
    /// distribution (unit tests), not in their random stream.
    pub fn new(spectrum: &Spectrum, drift_per_s: f64, layout: &[f64], run_s: f64, seed: u64) -> Result<LaserStream, InputError> {
        Self::build(spectrum, drift_per_s, layout, run_s, seed, JOINT_MAX_DIM)
    }

    /// [`LaserStream::new`] with the joint draw for n + K up to `joint_max` (0: never).
    fn build(spectrum: &Spectrum, drift_per_s: f64, layout: &[f64], run_s: f64, seed: u64, joint_max: usize) -> Result<LaserStream, InputError> {
        let mut c = Checker::new();
        if layout.is_empty() || layout.iter().any(|l| !l.is_finite() || *l <= 0.0) {
            c.push("layout", format!("{} intervals", layout.len()), "must hold at least one interval, each of a finite positive duration");
        }
        c.above("run_s", run_s, 0.0, MAX_RUN_S, "s");
        c.range("drift_per_s", drift_per_s, -1e-6, 1e-6, "1/s");
        c.finish()?;
        let cycle_s: f64 = layout.iter().sum();
        let l_min = layout.iter().cloned().fold(f64::INFINITY, f64::min);
        let delta = LN_10 / POLES_PER_DECADE;
        let f_lo = 0.1 / run_s.max(cycle_s);
        let f_top = 10.0 / (2.0 * PI * l_min);
        let f_high = spectrum.f_high;
        let mut h0 = 0.0;
        let mut h_rw = 0.0;
        let mut h_flicker = 0.0;
        let mut h1 = 0.0;
        let mut h2 = 0.0;
        for &(a, h) in &spectrum.terms {
            match a {
                0 => h0 += h,
                -2 => h_rw += h,
                -1 => h_flicker += h,
                1 => h1 += h,
                2 => h2 += h,
                _ => {}
            }
        }
        // Frequency poles (corner Hz, variance) and phase poles (corner Hz, variance s^2).
        let mut fpoles: Vec<(f64, f64)> = Vec::new();
        let mut ppoles: Vec<(f64, f64)> = Vec::new();
        let grid = |lo: f64, hi: f64| -> Vec<f64> {
            let mut g = Vec::new();
            let mut k = 0;
            while g.len() < MAX_POLES {
                let f = lo * libm::exp(delta * k as f64);
                if f > hi {
                    break;
                }
                g.push(f);
                k += 1;
            }
            g
        };
        if h_flicker > 0.0 {
            // Poles up to far beyond f_top; those above are merged into white FM below.
            for f in grid(f_lo, f_top * 1e3) {
                fpoles.push((f, h_flicker * delta));
            }
            // The rest of the infinite bank, above the last pole: a geometric sum of
            // low-frequency levels 2 var / (pi f).
            let last = fpoles.last().map(|p| p.0).unwrap_or(f_lo);
            let first_missing = last * libm::exp(delta);
            h0 += 2.0 * h_flicker * delta / (PI * first_missing) / (1.0 - libm::exp(-delta));
        }
        if h1 > 0.0 && f_high > f_lo {
            // Phase bank ending half a spacing below f_h, so the poles' total phase variance
            // equals that of h_1/(4 pi^2 f) up to f_h.
            let top = f_high * libm::exp(-delta / 2.0);
            let mut f = top;
            while f >= f_lo && ppoles.len() < MAX_POLES {
                ppoles.push((f, h1 * delta / (4.0 * PI * PI)));
                f *= libm::exp(-delta);
            }
        }
        if h2 > 0.0 {
            ppoles.push((f_high, h2 * f_high / (4.0 * PI * PI)));
        }
        let mut table_fit_error = None;
        if spectrum.table.is_some() {
            let g = grid(f_lo, f_high);
            if !g.is_empty() {
                let (fw, pw, err) = fit_table(spectrum, &g, delta);
                for (k, &f) in g.iter().enumerate() {
                    if fw[k] > 0.0 {
                        fpoles.push((f, fw[k]));
                    }
                    if pw[k] > 0.0 {
                        ppoles.push((f, pw[k]));
                    }
                }
                table_fit_error = Some(err);
            }
        }
        // Merge the frequency poles far above the shortest interval into white FM.
        let mut kept = Vec::new();
        for (f, v) in fpoles {
            if f > f_top {
                h0 += 2.0 * v / (PI * f);
            } else if v > 0.0 {
                kept.push((f, v));
            }
        }
        let fpoles = kept;
        let mut rng = Rng::new(seed ^ 0x6C61_7365_725F_6E7A);
        let zig = Ziggurat::new();
        let freq = fpoles
            .iter()
            .map(|&(f, v)| {
                let tau = 1.0 / (2.0 * PI * f);
                let x = libm::sqrt(v) * rng.gaussian();
                let pace = if tau < cycle_s {
                    Pace::Interval(layout.iter().map(|&l| OuStep::new(v, tau, l)).collect())
                } else {
                    let mut cycles = 1u64;
                    while (cycles * 2) as f64 * cycle_s * SLOW_RATIO <= tau && cycles < (1 << 40) {
                        cycles *= 2;
                    }
                    Pace::Block { step: OuStep::new(v, tau, cycles as f64 * cycle_s), cycles, left: 0, mean: 0.0 }
                };
                FreqProcess { x, pace }
            })
            .collect::<Vec<_>>();
        let phase = ppoles
            .iter()
            .filter(|p| p.1 > 0.0)
            .map(|&(f, v)| {
                let tau = 1.0 / (2.0 * PI * f);
                let x = libm::sqrt(v) * rng.gaussian();
                let step = |l: f64| phase_step(v, tau, l);
                let pace = if tau < cycle_s { PhasePace::Interval(layout.iter().map(|&l| step(l)).collect()) } else { PhasePace::Cycle(step(cycle_s).0, step(cycle_s).1) };
                PhaseProcess { x, pace }
            })
            .collect::<Vec<_>>();
        let d = 2.0 * PI * PI * h_rw;
        let wiener = (d > 0.0).then(|| (libm::sqrt(d * cycle_s), cycle_s / 2.0, libm::sqrt(d * cycle_s * cycle_s * cycle_s / 12.0)));
        let lowest = fpoles.iter().chain(ppoles.iter()).map(|p| p.0).fold(f64::INFINITY, f64::min);
        let summary = NoiseSummary {
            frequency_processes: freq.len(),
            phase_processes: phase.len(),
            lowest_corner_hz: if lowest.is_finite() { lowest } else { 0.0 },
            white_h0: h0,
            table_fit_error,
        };
        if !h0.is_finite() || freq.iter().any(|p| !p.x.is_finite()) {
            return Err(InputError::single("laser", "noise levels", "give values beyond the double range"));
        }
        let n = layout.len();
        let fast = freq.iter().filter(|p| matches!(p.pace, Pace::Interval(_))).count() + phase.iter().filter(|p| matches!(p.pace, PhasePace::Interval(_))).count();
        let (joint, freq, phase, white_sd) = if n + fast <= joint_max && (fast > 0 || h0 > 0.0) {
            let mut fast_freq = Vec::new();
            let mut slow_freq = Vec::new();
            for p in freq {
                match p.pace {
                    Pace::Interval(steps) => fast_freq.push((p.x, steps)),
                    pace => slow_freq.push(FreqProcess { x: p.x, pace }),
                }
            }
            let mut fast_phase = Vec::new();
            let mut slow_phase = Vec::new();
            for p in phase {
                match p.pace {
                    PhasePace::Interval(steps) => fast_phase.push((p.x, steps)),
                    pace => slow_phase.push(PhaseProcess { x: p.x, pace }),
                }
            }
            let white_var: Vec<f64> = layout.iter().map(|&l| h0 / 2.0 * l).collect();
            (Some(JointBank::new(&fast_freq, &fast_phase, &white_var)), slow_freq, slow_phase, vec![0.0; n])
        } else {
            (None, freq, phase, layout.iter().map(|&l| libm::sqrt(h0 / 2.0 * l)).collect())
        };
        Ok(LaserStream {
            white_sd,
            joint,
            layout: layout.to_vec(),
            cycle_s,
            wiener,
            w: 0.0,
            freq,
            phase,
            drift: drift_per_s,
            t0: 0.0,
            rng,
            zig,
            summary,
        })
    }

    /// How the noise is represented.
    pub fn summary(&self) -> &NoiseSummary {
        &self.summary
    }

    /// Number of intervals per cycle.
    pub fn intervals(&self) -> usize {
        self.layout.len()
    }

    /// Fills `out` (one entry per interval of the layout) with the integral of y over each
    /// interval of the next cycle, s (fractional frequency times seconds).
    pub fn next_cycle(&mut self, out: &mut [f64]) {
        let n = self.layout.len().min(out.len());
        let rng = &mut self.rng;
        let z = &self.zig;
        for i in 0..n {
            out[i] = if self.white_sd[i] > 0.0 { self.white_sd[i] * z.normal(rng) } else { 0.0 };
        }
        if let Some(j) = &mut self.joint {
            j.draw(&mut out[..n], rng, z);
        }
        // Processes constant over the cycle: their cycle average.
        let mut slow_mean = 0.0;
        if let Some((s1, half, sj)) = self.wiener {
            let dw = s1 * z.normal(rng);
            let j = self.w * self.cycle_s + half * dw + sj * z.normal(rng);
            self.w += dw;
            slow_mean += j / self.cycle_s;
        }
        for p in &mut self.freq {
            match &mut p.pace {
                Pace::Interval(steps) => {
                    for (o, s) in out[..n].iter_mut().zip(steps.iter()) {
                        *o += s.advance(&mut p.x, rng, z);
                    }
                }
                Pace::Block { step, cycles, left, mean } => {
                    if *left == 0 {
                        let j = step.advance(&mut p.x, rng, z);
                        *mean = j / (*cycles as f64 * self.cycle_s);
                        *left = *cycles;
                    }
                    *left -= 1;
                    slow_mean += *mean;
                }
            }
        }
        for p in &mut self.phase {
            match &p.pace {
                PhasePace::Interval(steps) => {
                    for (o, &(a, s)) in out[..n].iter_mut().zip(steps.iter()) {
                        let x1 = a * p.x + s * z.normal(rng);
                        *o += x1 - p.x;
                        p.x = x1;
                    }
                }
                &PhasePace::Cycle(a, s) => {
                    let x1 = a * p.x + s * z.normal(rng);
                    out[n - 1] += x1 - p.x;
                    p.x = x1;
                }
            }
        }
        let mut t = self.t0;
        for i in 0..n {
            let l = self.layout[i];
            out[i] += slow_mean * l;
            if self.drift != 0.0 {
                out[i] += self.drift * (t * l + 0.5 * l * l);
            }
            t += l;
        }
        self.t0 += self.cycle_s;
    }
}

/// Fits frequency and phase OU weights on the grid `g` to the tabulated part of the
/// spectrum by multiplicative non-negative updates on the relative misfit at the grid points
/// and the midpoints. Returns (frequency variances, phase variances, largest relative misfit).
fn fit_table(spectrum: &Spectrum, g: &[f64], delta: f64) -> (Vec<f64>, Vec<f64>, f64) {
    let k = g.len();
    let mut pts: Vec<f64> = Vec::with_capacity(2 * k);
    for (i, &f) in g.iter().enumerate() {
        pts.push(f);
        if i + 1 < k {
            pts.push(f * libm::exp(delta / 2.0));
        }
    }
    let target: Vec<f64> = pts.iter().map(|&f| spectrum.table_s_y(f).max(1e-300)).collect();
    // Basis values relative to the target: column j < k frequency poles, j >= k phase poles.
    let cols = 2 * k;
    let mut a = vec![0.0; pts.len() * cols];
    for (i, &f) in pts.iter().enumerate() {
        for (j, &fk) in g.iter().enumerate() {
            a[i * cols + j] = lorentz_freq(f, fk) / target[i];
            a[i * cols + k + j] = lorentz_phase(f, fk) / target[i];
        }
    }
    // Start: each pole carries its share of the local level (the flicker rule), split
    // between the two kinds.
    let mut w: Vec<f64> = (0..cols)
        .map(|j| {
            let fk = g[j % k];
            let s = spectrum.table_s_y(fk).max(1e-300);
            if j < k { 0.5 * s * fk * delta } else { 0.5 * s * fk * delta / ((2.0 * PI * fk) * (2.0 * PI * fk)) }
        })
        .collect();
    let col_sum: Vec<f64> = (0..cols).map(|j| (0..pts.len()).map(|i| a[i * cols + j]).sum::<f64>()).collect();
    let mut model = vec![0.0; pts.len()];
    for _ in 0..TABLE_FIT_ITERATIONS {
        for (i, m) in model.iter_mut().enumerate() {
            *m = (0..cols).map(|j| a[i * cols + j] * w[j]).sum::<f64>().max(1e-300);
        }
        for j in 0..cols {
            if col_sum[j] > 0.0 {
                let num: f64 = (0..pts.len()).map(|i| a[i * cols + j] / model[i]).sum();
                w[j] *= num / col_sum[j];
            }
        }
    }
    let mut err: f64 = 0.0;
    for i in 0..pts.len() {
        let m: f64 = (0..cols).map(|j| a[i * cols + j] * w[j]).sum();
        err = err.max((m - 1.0).abs());
    }
    (w[..k].to_vec(), w[k..].to_vec(), err)
}

// ---------------------------------------------------------------------------------------
// The closed loop

/// One probe interval: the step (pulse or free), its duration, the drive's x and y
/// components Omega cos(phi), Omega sin(phi) (rad/s) and what else does not depend on the
/// cycle's detuning (rho^2 = x^2 + y^2; for free evolution the decay factors
/// exp(-gamma L / 2) and exp(-gamma L)), computed once.
#[derive(Debug, Clone, Copy)]
struct Interval {
    step: Step,
    len: f64,
    inv_len: f64,
    drive: [f64; 2],
    rho2: f64,
    decay: [f64; 2],
}

/// Below this rotation angle beta L of a driven interval with decay, [`Interval::propagate`]
/// takes the general series of sequence.rs instead of the closed form (where the closed
/// form's terms of order alpha t and q^2 t^2 would cancel beyond rounding).
const CLOSED_FORM_MIN_ANGLE: f64 = 1e-2;

/// exp(x) - 1 for |x| <= 2^-6 by its Taylor polynomial of degree 7 (the first omitted
/// term is below 5e-18 relative: rounding), else `libm::expm1`.
#[inline]
fn expm1_fast(x: f64) -> f64 {
    if x.abs() <= 0.015625 {
        x * (1.0 + x * (0.5 + x * (1.0 / 6.0 + x * (1.0 / 24.0 + x * (1.0 / 120.0 + x * (1.0 / 720.0 + x * (1.0 / 5040.0)))))))
    } else {
        libm::expm1(x)
    }
}

impl Interval {
    fn new(step: Step, len: f64, gamma: f64) -> Interval {
        let drive = if step.omega == 0.0 { [0.0, 0.0] } else { [step.omega * libm::cos(step.phase), step.omega * libm::sin(step.phase)] };
        let rho2 = drive[0] * drive[0] + drive[1] * drive[1];
        let d = libm::exp(-gamma * len / 2.0);
        Interval { step, len, inv_len: 1.0 / len, drive, rho2, decay: [d, d * d] }
    }

    /// The generator at laser detuning `det` (rad/s): the same as `Generator::new(&step,
    /// det, gamma)` (sequence.rs) without recomputing the drive's cosine and sine.
    #[inline]
    fn generator(&self, det: f64, gamma: f64) -> Generator {
        let [x, y] = self.drive;
        let z = -(det + self.step.offset);
        let h = gamma / 2.0;
        Generator { a: [[-h, -z, y], [z, -h, -x], [-y, x, -gamma]], gamma, axis: [x, y, z] }
    }

    /// The Bloch vector `r` carried over the interval at laser detuning `det` (rad/s): the
    /// exact propagator of `Generator::propagator` (sequence.rs) applied to one vector,
    /// with nothing that does not depend on the detuning recomputed and no 3x3 matrix
    /// formed.
    ///
    /// - Free evolution: a turn about z by -(det + offset) L, the transverse part shrunk by
    ///   exp(-gamma L / 2) and w relaxed to -1 by exp(-gamma L) (optical Bloch equations
    ///   with amplitude damping; the factors are precomputed).
    /// - Driven without decay: Rodrigues' rotation formula on the vector, with
    ///   1 - cos(theta) = 2 sin^2(theta/2) (no cancellation at small angles).
    /// - Driven with decay: the Cayley-Hamilton form of `driven_with_decay` (sequence.rs):
    ///   exp(a t) = exp((r - h) t) (I + f1 Q + f2 Q^2), applied to r - r_ss and added to
    ///   the steady state r_ss, so r' = r_ss + exp(a t)(r - r_ss); cos(beta t) - 1 is
    ///   taken as -2 sin^2(beta t / 2), so the form holds down to small angles. Where the
    ///   real root does not converge, the pair is not well separated (beta^2 < c/2) or the
    ///   angle is below [`CLOSED_FORM_MIN_ANGLE`], the general propagator is used.
    ///
    /// Checked against `Generator::propagator` and `Generator::propagator_by_series` on
    /// random cases (unit tests below).
    #[inline]
    fn propagate(&self, r: [f64; 3], det: f64, gamma: f64) -> [f64; 3] {
        let z = -(det + self.step.offset);
        let t = self.len;
        if self.rho2 == 0.0 {
            let (s, c) = libm::sincos(z * t);
            let [d, d2] = self.decay;
            return [d * (c * r[0] - s * r[1]), d * (s * r[0] + c * r[1]), d2 * r[2] + (d2 - 1.0)];
        }
        let [x, y] = self.drive;
        if gamma == 0.0 {
            let n2 = self.rho2 + z * z;
            let n = libm::sqrt(n2);
            let (sh, ch) = libm::sincos(n * t / 2.0);
            let s = 2.0 * sh * ch;
            let omc = 2.0 * sh * sh;
            let k = [x / n, y / n, z / n];
            let kr = k[0] * r[0] + k[1] * r[1] + k[2] * r[2];
            let cross = [k[1] * r[2] - k[2] * r[1], k[2] * r[0] - k[0] * r[2], k[0] * r[1] - k[1] * r[0]];
            return [
                r[0] + s * cross[0] + omc * (k[0] * kr - r[0]),
                r[1] + s * cross[1] + omc * (k[1] * kr - r[1]),
                r[2] + s * cross[2] + omc * (k[2] * kr - r[2]),
            ];
        }
        match self.driven_with_decay(r, z, gamma) {
            Some(out) => out,
            None => self.generator(det, gamma).propagator(t).apply(r),
        }
    }

    /// The closed form of [`Interval::propagate`] for a driven interval with decay (None
    /// where it does not apply).
    #[inline]
    fn driven_with_decay(&self, v: [f64; 3], z: f64, gamma: f64) -> Option<[f64; 3]> {
        let [x, y] = self.drive;
        let t = self.len;
        let h = gamma / 2.0;
        let rho2 = self.rho2;
        let z2 = z * z;
        let n2 = rho2 + z2;
        let hz2 = h * z2;
        // The real root of p(l) = l^3 + h l^2 + n^2 l + h z^2 in [-h, 0]. With l = h u,
        // u = -z^2/n^2 - (h/n)^2 (u^3 + u^2), a contraction of factor at most (h/n)^2: two
        // rounds give r = -h z^2/n^2 - h^3 z^4 rho^2 / n^8 with a relative error below
        // (h/n)^4 / (1 - (h/n)^2), rounding when (h/n)^2 <= 1e-8 (weak decay, the common
        // case). Otherwise Newton steps safeguarded by bisection, as in sequence.rs.
        let inv_n2 = 1.0 / n2;
        let q = z2 * inv_n2;
        let eps2 = h * h * inv_n2;
        let r = if eps2 <= 1e-8 {
            -h * q * (1.0 + eps2 * q * rho2 * inv_n2)
        } else {
            let (mut lo, mut hi) = (-h, 0.0);
            let mut r = -hz2 * inv_n2;
            let mut converged = false;
            for _ in 0..60 {
                let p = ((r + h) * r + n2) * r + hz2;
                if p == 0.0 {
                    converged = true;
                    break;
                }
                if p > 0.0 {
                    hi = r
                } else {
                    lo = r
                }
                let dp = (3.0 * r + 2.0 * h) * r + n2;
                let mut next = r - p / dp;
                let newton = next > lo && next < hi;
                if !newton {
                    next = 0.5 * (lo + hi);
                }
                let dr = next - r;
                r = next;
                if (newton && dr.abs() <= 1e-8 * r.abs()) || hi - lo <= 1e-16 * h {
                    converged = true;
                    break;
                }
            }
            if !converged {
                return None;
            }
            r
        };
        let r = r.clamp(-h, 0.0);
        let b = h + r;
        let c = n2 + r * b;
        let w2 = c - b * b / 4.0;
        if w2.is_nan() || c.is_nan() || w2 < 0.5 * c {
            return None;
        }
        let beta = libm::sqrt(w2);
        if (beta * t).is_nan() || beta * t < CLOSED_FORM_MIN_ANGLE {
            return None;
        }
        let alpha = -(h + 3.0 * r) / 2.0;
        let (sh, ch) = libm::sincos(beta * t / 2.0);
        let sb = 2.0 * sh * ch;
        let cbm1 = -2.0 * sh * sh;
        let cb = 1.0 + cbm1;
        let em1 = expm1_fast(alpha * t);
        let re1 = em1 * cb + cbm1;
        let im1 = (1.0 + em1) * sb;
        let inv_q2 = 1.0 / (alpha * alpha + beta * beta);
        let f2 = (im1 * (alpha / beta) - re1) * inv_q2;
        let f1 = (re1 * alpha + im1 * beta) * inv_q2 - f2 * alpha;
        let scale = 1.0 + expm1_fast((r - h) * t);
        // Steady state of the optical Bloch equations (sequence.rs).
        let hz = h * h + z2;
        let m2_den = -2.0 / (rho2 + 2.0 * hz);
        let ss = [(h * y + z * x) * m2_den, (z * y - h * x) * m2_den, hz * m2_den];
        let d = [v[0] - ss[0], v[1] - ss[1], v[2] - ss[2]];
        // Q = [[-r, -z, y], [z, -r, -x], [-y, x, -h - r]].
        let q = |u: [f64; 3]| [-r * u[0] - z * u[1] + y * u[2], z * u[0] - r * u[1] - x * u[2], -y * u[0] + x * u[1] - (h + r) * u[2]];
        let qd = q(d);
        let qqd = q(qd);
        let out = [
            ss[0] + scale * (d[0] + f1 * qd[0] + f2 * qqd[0]),
            ss[1] + scale * (d[1] + f1 * qd[1] + f2 * qqd[1]),
            ss[2] + scale * (d[2] + f1 * qd[2] + f2 * qqd[2]),
        ];
        (out[0].is_finite() && out[1].is_finite() && out[2].is_finite()).then_some(out)
    }
}

/// A running simulation; advance it in chunks, then [`Simulation::finish`].
#[derive(Debug, Clone)]
pub struct Simulation {
    name: String,
    nu0: f64,
    cycle_s: f64,
    probe_s: f64,
    gamma: f64,
    detuning_factor: f64,
    op: Operating,
    ro: Readout,
    intervals: Vec<Interval>,
    laser: LaserStream,
    integrals: Vec<f64>,
    rng: Rng,
    atoms: u64,
    squeeze: f64,
    gain: f64,
    gain2: f64,
    second: bool,
    correction_hz: f64,
    rate_hz: f64,
    side: f64,
    last: Option<f64>,
    settle: u64,
    total: u64,
    done: u64,
    y_locked: Vec<f64>,
    y_free: Vec<f64>,
    phase_cycles: u64,
    off_cycles: u64,
    first_off: Option<u64>,
    trace_cap: u64,
    trace: Vec<CycleRecord>,
    analytic: AnalyticOverlay,
    analytic_phase_rms: f64,
    analytic_notes: Vec<String>,
    options: SimOptions,
}

fn check_options(o: &SimOptions) -> Result<(), InputError> {
    let mut c = Checker::new();
    if o.cycles < MIN_CYCLES || o.cycles > MAX_CYCLES {
        c.push("options.cycles", o.cycles.to_string(), format!("must be a whole number from {MIN_CYCLES} to {MAX_CYCLES}"));
    }
    if let Some(s) = o.settle_cycles {
        if s > MAX_SETTLE_CYCLES {
            c.push("options.settle_cycles", s.to_string(), format!("must be at most {MAX_SETTLE_CYCLES}"));
        }
    }
    if o.pulse_substeps < 1 || o.pulse_substeps > MAX_PULSE_SUBSTEPS {
        c.push("options.pulse_substeps", o.pulse_substeps.to_string(), format!("must be a whole number from 1 to {MAX_PULSE_SUBSTEPS}"));
    }
    if o.seed > MAX_SEED {
        c.push("options.seed", o.seed.to_string(), format!("must be a whole number from 0 to {MAX_SEED} (exact in JavaScript)"));
    }
    c.range("options.initial_offset_hz", o.initial_offset_hz, -1e9, 1e9, "Hz");
    c.range("options.confidence", o.confidence, crate::estimate::CONFIDENCE_RANGE.0, crate::estimate::CONFIDENCE_RANGE.1, "");
    if o.trace_cycles > MAX_TRACE {
        c.push("options.trace_cycles", o.trace_cycles.to_string(), format!("must be at most {MAX_TRACE}"));
    }
    c.finish()
}

impl Simulation {
    /// Validates the design and the options and prepares the run (operating point, laser
    /// model, the analytic curve at the averaging times the run will give).
    pub fn new(design: &Design, options: &SimOptions) -> Result<Simulation, InputError> {
        design.validate()?;
        check_options(options)?;
        let cycle_s = design.cycle_time_s();
        let nu0 = design.transition.frequency_hz;
        let probe = Probe::from_design(design);
        let ro = Readout::from_design(design);
        let op = operating_point(&probe, &ro, design.lock.operating_point)?;
        let attack_s = design.lock.attack_time_s;
        let settle = options.settle_cycles.unwrap_or_else(|| (libm::ceil(10.0 * attack_s / cycle_s) as u64).min(MAX_SETTLE_CYCLES));
        let total = settle + options.cycles;
        let subs = options.pulse_substeps.max(1);
        let mut intervals = Vec::new();
        for s in &probe.steps {
            let n = if s.omega != 0.0 { subs } else { 1 };
            let len = s.duration_s / n as f64;
            for _ in 0..n {
                intervals.push(Interval::new(*s, len, probe.gamma));
            }
        }
        let probe_s = probe.duration_s();
        let mut c = Checker::new();
        let run_s = total as f64 * cycle_s;
        if run_s > MAX_RUN_S {
            c.push("options.cycles", format!("{} cycles of {} s", total, show(cycle_s)), format!("the run (settling included) may last at most {} s", show(MAX_RUN_S)));
        }
        let work = total.saturating_mul(intervals.len() as u64 + 1);
        if work > MAX_TOTAL_INTERVALS {
            c.push(
                "options.cycles",
                format!("{total} cycles of {} intervals", intervals.len() + 1),
                format!("cycles times intervals per cycle (settling included) may be at most {MAX_TOTAL_INTERVALS}; use fewer cycles or sub-steps"),
            );
        }
        c.finish()?;
        let mut layout: Vec<f64> = intervals.iter().map(|i| i.len).collect();
        let dead = cycle_s - probe_s;
        layout.push(if dead > 1e-12 * cycle_s { dead } else { 1e-12 * cycle_s });
        let spectrum = Spectrum::from_laser(&design.laser, nu0);
        let laser = if options.laser_noise {
            LaserStream::new(&spectrum, design.laser.drift_per_s, &layout, run_s, options.seed)?
        } else {
            LaserStream::new(&Spectrum::power_laws(&[], spectrum.f_high), design.laser.drift_per_s, &layout, run_s, options.seed)?
        };
        // The analytic curve at tau = 2^j T_c, j = 0..K, for the octave taus of the run.
        let max_m = options.cycles / 2;
        let k = 63 - max_m.max(1).leading_zeros() as u64;
        let k = k.max(1);
        let eval_opts = EvalOptions { tau_points: (k + 1) as usize, tau_max_s: cycle_s * (1u64 << k) as f64, ..EvalOptions::default() };
        let e = evaluate(design, &eval_opts)?;
        let analytic = AnalyticOverlay { tau_s: e.curve.tau_s.clone(), total: e.curve.total.clone(), free_laser: e.curve.free_laser.clone() };
        let (atoms, squeeze) = match design.atoms.entanglement {
            Entanglement::None => (design.atoms.count, 1.0),
            Entanglement::Squeezed { gain_db } => (design.atoms.count, libm::sqrt(libm::pow(10.0, -gain_db / 10.0))),
            Entanglement::Ghz => (1, 1.0),
        };
        let gain = cycle_s / attack_s;
        Ok(Simulation {
            name: design.name.clone(),
            nu0,
            cycle_s,
            probe_s,
            gamma: probe.gamma,
            detuning_factor: probe.detuning_factor,
            op,
            ro,
            integrals: vec![0.0; layout.len()],
            intervals,
            laser,
            rng: Rng::new(options.seed ^ 0x6174_6F6D_735F_6E7A),
            atoms,
            squeeze,
            gain,
            gain2: gain * gain / 4.0,
            second: options.second_integrator,
            correction_hz: options.initial_offset_hz,
            rate_hz: 0.0,
            side: 1.0,
            last: None,
            settle,
            total,
            done: 0,
            y_locked: Vec::with_capacity(options.cycles.min(1 << 20) as usize),
            y_free: Vec::with_capacity(options.cycles.min(1 << 20) as usize),
            phase_cycles: 0,
            off_cycles: 0,
            first_off: None,
            trace_cap: options.trace_cycles as u64,
            trace: Vec::new(),
            analytic,
            analytic_phase_rms: e.limits.probe_phase_rms_rad,
            analytic_notes: e.limits.notes.clone(),
            options: options.clone(),
        })
    }

    /// The operating point's detuning from line centre, Hz.
    pub fn operating_detuning_hz(&self) -> f64 {
        self.op.detuning_hz
    }

    /// Runs up to `max_cycles` more cycles and reports where the run stands.
    pub fn advance(&mut self, max_cycles: u64) -> Progress {
        let end = self.done.saturating_add(max_cycles).min(self.total);
        while self.done < end {
            self.cycle();
        }
        self.progress()
    }

    /// Where the run stands.
    pub fn progress(&self) -> Progress {
        Progress {
            cycles_done: self.done,
            cycles_total: self.total,
            fraction: self.done as f64 / self.total as f64,
            simulated_s: self.done as f64 * self.cycle_s,
            phase_excursion_cycles: self.phase_cycles,
            off_fringe_cycles: self.off_cycles,
            finished: self.done >= self.total,
        }
    }

    fn cycle(&mut self) {
        self.laser.next_cycle(&mut self.integrals);
        let c = self.correction_hz;
        let mut r = GROUND;
        let mut err_cycles = 0.0; // laser frequency error integrated over the probe, Hz s
        for (iv, &j) in self.intervals.iter().zip(self.integrals.iter()) {
            let err_hz = self.nu0 * j * iv.inv_len + c;
            err_cycles += err_hz * iv.len;
            let det = 2.0 * PI * (self.side * self.op.detuning_hz + err_hz) * self.detuning_factor;
            r = iv.propagate(r, det, self.gamma);
        }
        let p = ((r[2] + 1.0) / 2.0).clamp(0.0, 1.0);
        let pm = self.ro.measured(p).clamp(0.0, 1.0);
        let count = binomial(&mut self.rng, self.atoms, pm);
        let mut m = count as f64 / self.atoms as f64;
        if self.squeeze != 1.0 {
            m = pm + (m - pm) * self.squeeze;
        }
        let phase = 2.0 * PI * self.detuning_factor * err_cycles;
        let mean_err = err_cycles / self.probe_s;
        let recording = self.done >= self.settle;
        if recording {
            if phase.abs() > PI {
                self.phase_cycles += 1;
            }
            if mean_err.abs() > self.op.edge_hz {
                self.off_cycles += 1;
                if self.first_off.is_none() {
                    self.first_off = Some(self.done - self.settle);
                }
            }
            let free: f64 = self.integrals.iter().sum::<f64>() / self.cycle_s;
            self.y_free.push(free);
            self.y_locked.push(free + c / self.nu0);
        }
        if self.done < self.trace_cap {
            self.trace.push(CycleRecord {
                cycle: self.done,
                side: self.side as i32,
                excitation: p,
                measured: m,
                correction_hz: c,
                error_hz: mean_err,
                phase_excursion_rad: phase,
            });
        }
        if let Some(prev) = self.last {
            let e = self.side * (m - prev) / (2.0 * self.op.slope);
            if self.second {
                self.rate_hz -= self.gain2 * e;
            }
            self.correction_hz += -self.gain * e + self.rate_hz;
        }
        self.last = Some(m);
        self.side = -self.side;
        self.done += 1;
    }

    /// Ends the run (early if not all cycles ran) and estimates the Allan deviations.
    /// Fails only when fewer than [`MIN_CYCLES`] cycles were recorded.
    pub fn finish(self) -> Result<SimResult, InputError> {
        let n = self.y_locked.len() as u64;
        if n < MIN_CYCLES {
            return Err(InputError::single(
                "cycles",
                format!("{n} cycles recorded"),
                format!("at least {MIN_CYCLES} cycles must be recorded after the {} settling cycles; advance further before finishing", self.settle),
            ));
        }
        let opts = Options { taus: Taus::Octave, confidence: self.options.confidence, alpha: None };
        let locked = estimate(crate::estimate::Series::Frequency(&self.y_locked), self.cycle_s, Estimator::Allan, &opts)?;
        let free_laser = estimate(crate::estimate::Series::Frequency(&self.y_free), self.cycle_s, Estimator::Allan, &opts)?;
        let fringe = FringeSummary {
            phase_excursion_cycles: self.phase_cycles,
            off_fringe_cycles: self.off_cycles,
            first_off_fringe_cycle: self.first_off,
            edge_hz: self.op.edge_hz,
            analytic_phase_rms_rad: self.analytic_phase_rms,
        };
        let hops = self.phase_cycles > 0 || self.off_cycles > 0;
        let mut departures = Vec::new();
        for p in &locked.points {
            let j = 63 - p.m.leading_zeros() as usize;
            let Some(&a) = self.analytic.total.get(j) else { continue };
            let edf = p.edf.clamp(crate::estimate::DOF_RANGE.0, crate::estimate::DOF_RANGE.1);
            let lo_q = crate::estimate::chi2_quantile((1.0 + FLAG_CONFIDENCE) / 2.0, edf)?;
            let hi_q = crate::estimate::chi2_quantile((1.0 - FLAG_CONFIDENCE) / 2.0, edf)?;
            let (ci_low, ci_high) = (p.deviation * libm::sqrt(edf / lo_q), p.deviation * libm::sqrt(edf / hi_q));
            if a < ci_low / (1.0 + MODEL_TOLERANCE) || a > ci_high * (1.0 + MODEL_TOLERANCE) {
                let reason = if hops {
                    format!(
                        "fringe hops: {} cycles with a laser phase excursion over the probe beyond pi, {} cycles off the central fringe; the linear budget does not hold",
                        self.phase_cycles, self.off_cycles
                    )
                } else if p.deviation > a {
                    "above the analytic curve beyond the confidence interval".to_string()
                } else {
                    "below the analytic curve beyond the confidence interval".to_string()
                };
                departures.push(Departure { tau_s: p.tau_s, simulated: p.deviation, ci_low, ci_high, analytic: a, reason });
            }
        }
        let mut notes = Vec::new();
        if self.done < self.total {
            notes.push(format!("The run was ended early after {} of {} cycles.", self.done, self.total));
        }
        if hops {
            notes.push(format!(
                "Fringe hops: {} of {} recorded cycles had a laser phase excursion over the probe beyond pi and {} were locked off the central fringe; the probe is too long for the laser.",
                self.phase_cycles, n, self.off_cycles
            ));
        }
        if departures.is_empty() {
            notes.push("The simulated locked laser agrees with the analytic curve within its confidence intervals.".into());
        } else {
            notes.push(format!("The simulation departs from the analytic curve beyond its confidence interval at {} of {} averaging times.", departures.len(), locked.points.len()));
        }
        if let Some(e) = self.laser.summary().table_fit_error {
            notes.push(format!("The tabulated laser spectrum is represented within a relative misfit of {e:.1e} at the fit frequencies."));
        }
        notes.extend(self.analytic_notes.iter().filter(|s| s.contains("fringe hops")).cloned());
        Ok(SimResult {
            design_name: self.name,
            cycles: n,
            settle_cycles: self.settle,
            cycle_time_s: self.cycle_s,
            seed: self.options.seed,
            locked,
            free_laser,
            analytic: self.analytic,
            departures,
            fringe,
            noise: self.laser.summary.clone(),
            notes,
            trace: self.trace,
        })
    }
}

/// Runs a whole simulation at once (for scripts and tests).
pub fn simulate(design: &Design, options: &SimOptions) -> Result<SimResult, InputError> {
    let mut s = Simulation::new(design, options)?;
    s.advance(u64::MAX);
    s.finish()
}

#[cfg(test)]
mod tests {
    //! Slow twins of the fast paths: the vector propagator against the general series of
    //! sequence.rs, the joint draw of the fast laser processes against the Ornstein-Uhlenbeck
    //! covariance in closed form and against the literal small-step recursion, the paired
    //! ziggurat draw against the normal distribution.

    use super::*;
    use crate::estimate::chi2_quantile;

    /// Log-uniform on [lo, hi].
    fn log_uniform(rng: &mut Rng, lo: f64, hi: f64) -> f64 {
        lo * libm::exp(rng.uniform() * libm::log(hi / lo))
    }

    /// `Interval::propagate` equals `Generator::propagator_by_series` (the scaling-and-squaring
    /// series of sequence.rs) applied to the same vector, and `Generator::propagator`, within
    /// 1e-13 (1 + rate x duration) (the Bloch vector has length at most 1; rounding grows with
    /// the angle turned), on random pulses and free steps with and
    /// without decay: Rabi frequencies 1e-1 to 1e4 rad/s, decay rates 1e-8 to 10 /s, steps of
    /// 1e-5 to 1 s, detunings up to three Rabi frequencies.
    #[test]
    fn vector_propagator_equals_the_general_propagator_on_random_cases() {
        let mut rng = Rng::new(2024);
        let mut closed = 0;
        for case in 0..20_000 {
            let len = log_uniform(&mut rng, 1e-5, 1.0);
            let omega = if case % 5 == 0 { 0.0 } else { log_uniform(&mut rng, 0.1, 1e4) };
            let gamma = if case % 3 == 0 { 0.0 } else { log_uniform(&mut rng, 1e-8, 10.0) };
            let step = Step { duration_s: len, omega, phase: 2.0 * PI * rng.uniform(), offset: if case % 7 == 0 { 10.0 * (rng.uniform() - 0.5) } else { 0.0 } };
            let iv = Interval::new(step, len, gamma);
            let scale = if omega > 0.0 { omega } else { 1.0 / len };
            let det = 3.0 * scale * (2.0 * rng.uniform() - 1.0);
            // A random state inside the Bloch ball.
            let mut r = [2.0 * rng.uniform() - 1.0, 2.0 * rng.uniform() - 1.0, 2.0 * rng.uniform() - 1.0];
            let norm = libm::sqrt(r[0] * r[0] + r[1] * r[1] + r[2] * r[2]);
            if norm > 1.0 {
                r = [r[0] / norm, r[1] / norm, r[2] / norm];
            }
            let fast = iv.propagate(r, det, gamma);
            let z = -(det + step.offset);
            if gamma > 0.0 && omega > 0.0 && iv.driven_with_decay(r, z, gamma).is_some() {
                closed += 1;
            }
            let g = crate::sequence::Generator::new(&step, det, gamma);
            // Rounding grows with the angle turned (both ways).
            let tol = 1e-13 * (1.0 + (g.rate() * len));
            for (what, slow) in [("series", g.propagator_by_series(len).apply(r)), ("propagator", g.propagator(len).apply(r))] {
                for i in 0..3 {
                    assert!((fast[i] - slow[i]).abs() < tol, "case {case} ({what}): omega {omega} gamma {gamma} len {len} det {det}: {fast:?} vs {slow:?}");
                }
            }
        }
        // The closed form carried most driven steps with decay.
        assert!(closed > 6000, "{closed}");
    }

    /// One random layout and set of fast processes: (interval lengths, frequency processes
    /// (variance, tau), phase processes (variance s^2, tau), white FM h0).
    struct Case {
        layout: Vec<f64>,
        freq: Vec<(f64, f64)>,
        phase: Vec<(f64, f64)>,
        h0: f64,
    }

    fn random_case(rng: &mut Rng, max_intervals: usize) -> Case {
        let n = 1 + (rng.uniform() * max_intervals as f64) as usize;
        let layout: Vec<f64> = (0..n).map(|_| log_uniform(rng, 1e-3, 0.1)).collect();
        let cycle: f64 = layout.iter().sum();
        let l_min = layout.iter().cloned().fold(f64::INFINITY, f64::min);
        let kf = (rng.uniform() * 5.0) as usize;
        let kp = (rng.uniform() * 3.0) as usize;
        let freq = (0..kf).map(|_| (log_uniform(rng, 1e-34, 1e-30), log_uniform(rng, 0.05 * l_min, cycle))).collect();
        let phase = (0..kp).map(|_| (log_uniform(rng, 1e-36, 1e-32), log_uniform(rng, 0.05 * l_min, cycle))).collect();
        let h0 = if rng.uniform() < 0.7 { log_uniform(rng, 1e-34, 1e-30) } else { 0.0 };
        Case { layout, freq, phase, h0 }
    }

    fn bank(c: &Case, x0: &[f64]) -> JointBank {
        let freq: Vec<(f64, Vec<OuStep>)> = c.freq.iter().zip(x0).map(|(&(v, tau), &x)| (x, c.layout.iter().map(|&l| OuStep::new(v, tau, l)).collect())).collect();
        let phase: Vec<(f64, Vec<(f64, f64)>)> = c.phase.iter().zip(&x0[c.freq.len()..]).map(|(&(v, tau), &x)| (x, c.layout.iter().map(|&l| phase_step(v, tau, l)).collect())).collect();
        let white: Vec<f64> = c.layout.iter().map(|&l| c.h0 / 2.0 * l).collect();
        JointBank::new(&freq, &phase, &white)
    }

    /// Sigma = L L^T from the packed factor.
    fn sigma_of(b: &JointBank) -> Vec<Vec<f64>> {
        let dim = b.n + b.k;
        let mut rows = Vec::new();
        let mut pos = 0;
        for j in 0..dim {
            rows.push(b.l[pos..pos + j + 1].to_vec());
            pos += j + 1;
        }
        (0..dim).map(|i| (0..dim).map(|j| (0..=i.min(j)).map(|p| rows[i][p] * rows[j][p]).sum()).collect()).collect()
    }

    /// Mean map F (n x K), end-state factors A and covariance Sigma of (J_1..J_n, s'_1..s'_K)
    /// given the start states, in closed form from the covariance of an Ornstein-Uhlenbeck
    /// process started at x0, E[x(t)] = x0 e^(-t/tau), Cov(x(s), x(t)) = v (e^(-|t-s|/tau) -
    /// e^(-(t+s)/tau)) ("On the theory of the Brownian motion", Phys. Rev. 36, 823 (1930)),
    /// integrated over the intervals by hand (frequency processes) or differenced at the
    /// interval ends (phase processes); white FM adds h0 L / 2 to each interval's variance.
    fn closed_form(c: &Case) -> (Vec<Vec<f64>>, Vec<f64>, Vec<Vec<f64>>) {
        let n = c.layout.len();
        let k = c.freq.len() + c.phase.len();
        let dim = n + k;
        let ends: Vec<f64> = c.layout.iter().scan(0.0, |t, l| {
            *t += l;
            Some(*t)
        }).collect();
        let start = |i: usize| if i == 0 { 0.0 } else { ends[i - 1] };
        let big_t = ends[n - 1];
        let mut f = vec![vec![0.0; k]; n];
        let mut a = vec![0.0; k];
        let mut s = vec![vec![0.0; dim]; dim];
        for i in 0..n {
            s[i][i] += c.h0 / 2.0 * c.layout[i];
        }
        for (p, &(v, tau)) in c.freq.iter().enumerate() {
            let em = |i: usize| tau * (libm::exp(-start(i) / tau) - libm::exp(-ends[i] / tau));
            let one = |i: usize| -tau * libm::expm1(-c.layout[i] / tau);
            for i in 0..n {
                f[i][p] = em(i);
                for j in 0..n {
                    let stationary = if i == j {
                        let x = c.layout[i] / tau;
                        2.0 * tau * tau * (x + libm::expm1(-x))
                    } else {
                        let (lo, hi) = (i.min(j), i.max(j));
                        one(lo) * one(hi) * libm::exp(-(start(hi) - ends[lo]) / tau)
                    };
                    s[i][j] += v * (stationary - em(i) * em(j));
                }
                let cov = v * (one(i) * libm::exp(-(big_t - ends[i]) / tau) - libm::exp(-big_t / tau) * em(i));
                s[i][n + p] += cov;
                s[n + p][i] += cov;
            }
            a[p] = libm::exp(-big_t / tau);
            s[n + p][n + p] += v * -libm::expm1(-2.0 * big_t / tau);
        }
        for (q, &(v, tau)) in c.phase.iter().enumerate() {
            let p = c.freq.len() + q;
            let cf = |t1: f64, t2: f64| v * (libm::exp(-(t1 - t2).abs() / tau) - libm::exp(-(t1 + t2) / tau));
            for i in 0..n {
                f[i][p] = libm::exp(-ends[i] / tau) - libm::exp(-start(i) / tau);
                for j in 0..n {
                    s[i][j] += cf(ends[i], ends[j]) - cf(ends[i], start(j)) - cf(start(i), ends[j]) + cf(start(i), start(j));
                }
                let cov = cf(ends[i], big_t) - cf(start(i), big_t);
                s[i][n + p] += cov;
                s[n + p][i] += cov;
            }
            a[p] = libm::exp(-big_t / tau);
            s[n + p][n + p] += cf(big_t, big_t);
        }
        (f, a, s)
    }

    /// The joint draw's mean map, end-state factors and covariance (L L^T) equal the closed
    /// forms within 1e-9 of the scale sqrt(Sigma_ii Sigma_jj) (F times a typical start state,
    /// the state's standard deviation: within 1e-9 of the standard deviation of J_i plus the
    /// mean), on 300 random layouts and process sets.
    #[test]
    fn joint_draw_moments_equal_the_ornstein_uhlenbeck_closed_forms() {
        let mut rng = Rng::new(7);
        for case in 0..300 {
            let c = random_case(&mut rng, 12);
            let k = c.freq.len() + c.phase.len();
            if k == 0 && c.h0 == 0.0 {
                continue;
            }
            let b = bank(&c, &vec![0.0; k]);
            let (f, a, s) = closed_form(&c);
            let got = sigma_of(&b);
            let n = c.layout.len();
            for i in 0..n + k {
                for j in 0..n + k {
                    let scale = libm::sqrt(s[i][i] * s[j][j]);
                    assert!((got[i][j] - s[i][j]).abs() <= 1e-9 * scale, "case {case} Sigma[{i}][{j}]: {} vs {} (scale {scale})", got[i][j], s[i][j]);
                }
            }
            for p in 0..k {
                assert!((b.a[p] - a[p]).abs() <= 1e-12, "case {case} A[{p}]");
                let var = if p < c.freq.len() { c.freq[p].0 } else { c.phase[p - c.freq.len()].0 };
                for i in 0..n {
                    // The error of the conditional mean for a typical start state, against
                    // the spread of J_i and the mean itself.
                    let fi = b.f[i * k + p];
                    let sd = libm::sqrt(var);
                    assert!((fi - f[i][p]).abs() * sd <= 1e-9 * (libm::sqrt(s[i][i]) + sd * f[i][p].abs()), "case {case} F[{i}][{p}]: {fi} vs {}", f[i][p]);
                }
            }
        }
    }

    /// The literal recursion of each process with many small steps (slow twin): the exact
    /// first-order autoregression x' = a x + sqrt(v (1 - a^2)) g over steps of at most a
    /// fortieth of the process's correlation time, the integral of a frequency process by the
    /// trapezoid rule (relative bias of order (dt/tau)^2 / 12, below 1e-4 here), white FM as
    /// one normal per interval. Returns (J_1..J_n, s'_1..s'_K).
    fn small_step_draw(c: &Case, x0: &[f64], rng: &mut Rng) -> Vec<f64> {
        let n = c.layout.len();
        let mut out = vec![0.0; n];
        let mut states = Vec::new();
        let procs = c.freq.iter().map(|&(v, tau)| (v, tau, true)).chain(c.phase.iter().map(|&(v, tau)| (v, tau, false)));
        for ((v, tau, is_freq), &x_start) in procs.zip(x0) {
            let mut x = x_start;
            for (i, &l) in c.layout.iter().enumerate() {
                let m = libm::ceil(40.0 * l / tau).max(1.0) as usize;
                let dt = l / m as f64;
                let a = libm::exp(-dt / tau);
                let sd = libm::sqrt(v * (1.0 - a * a));
                let x_begin = x;
                let mut integral = 0.0;
                for _ in 0..m {
                    let x1 = a * x + sd * rng.gaussian();
                    integral += 0.5 * (x + x1) * dt;
                    x = x1;
                }
                out[i] += if is_freq { integral } else { x - x_begin };
            }
            states.push(x);
        }
        for (i, &l) in c.layout.iter().enumerate() {
            out[i] += libm::sqrt(c.h0 / 2.0 * l) * rng.gaussian();
        }
        out.extend(states);
        out
    }

    /// Sample means, variances and covariances of `draws` vectors.
    fn moments(draws: &[Vec<f64>]) -> (Vec<f64>, Vec<Vec<f64>>, Vec<Vec<f64>>) {
        let d = draws[0].len();
        let nf = draws.len() as f64;
        let mean: Vec<f64> = (0..d).map(|i| draws.iter().map(|v| v[i]).sum::<f64>() / nf).collect();
        let mut cov = vec![vec![0.0; d]; d];
        let mut se = vec![vec![0.0; d]; d];
        for i in 0..d {
            for j in 0..d {
                let prods: Vec<f64> = draws.iter().map(|v| (v[i] - mean[i]) * (v[j] - mean[j])).collect();
                let m = prods.iter().sum::<f64>() / nf;
                let var = prods.iter().map(|p| (p - m) * (p - m)).sum::<f64>() / (nf - 1.0);
                cov[i][j] = m;
                se[i][j] = libm::sqrt(var / nf);
            }
        }
        (mean, cov, se)
    }

    /// The joint draw against the small-step recursion in distribution, from the same start
    /// states, on random cases: every mean, variance and covariance of (J, s') agrees within
    /// 5 standard errors of the difference of the two samples (two-sample z test, 20 000
    /// draws each; common practice), with 1e-3 of the twin's value allowed for its
    /// trapezoid bias.
    #[test]
    fn joint_draw_matches_the_small_step_recursion_in_distribution() {
        let mut rng = Rng::new(11);
        let zig = Ziggurat::new();
        let draws = 20_000;
        let mut tested = 0;
        while tested < 3 {
            let c = random_case(&mut rng, 5);
            let k = c.freq.len() + c.phase.len();
            if k == 0 {
                continue;
            }
            tested += 1;
            let x0: Vec<f64> = c.freq.iter().chain(&c.phase).map(|&(v, _)| libm::sqrt(v) * rng.gaussian()).collect();
            let mut b = bank(&c, &x0);
            let n = c.layout.len();
            let fast: Vec<Vec<f64>> = (0..draws)
                .map(|_| {
                    b.x.copy_from_slice(&x0);
                    let mut out = vec![0.0; n];
                    b.draw(&mut out, &mut rng, &zig);
                    out.extend_from_slice(&b.x);
                    out
                })
                .collect();
            let slow: Vec<Vec<f64>> = (0..draws).map(|_| small_step_draw(&c, &x0, &mut rng)).collect();
            let (m1, c1, s1) = moments(&fast);
            let (m2, c2, s2) = moments(&slow);
            let nf = draws as f64;
            for i in 0..n + k {
                let sd = libm::sqrt((c1[i][i] + c2[i][i]) / nf);
                assert!((m1[i] - m2[i]).abs() <= 5.0 * sd + 1e-3 * m2[i].abs(), "mean {i}: {} vs {} (se {sd})", m1[i], m2[i]);
                for j in 0..=i {
                    let se = libm::sqrt(s1[i][j] * s1[i][j] + s2[i][j] * s2[i][j]);
                    assert!((c1[i][j] - c2[i][j]).abs() <= 5.0 * se + 1e-3 * c2[i][j].abs(), "cov [{i}][{j}]: {} vs {} (se {se})", c1[i][j], c2[i][j]);
                }
            }
        }
    }

    /// The stream with the joint draw against the stream drawn interval by interval (the
    /// path above [`JOINT_MAX_DIM`]) for white FM, flicker FM, flicker PM and white PM, on a
    /// layout with short pulses. Compared: each interval's mean frequency less the cycle's
    /// mean, J_i / L_i - J / T_c (the processes slower than the cycle, constant over it,
    /// drop out, so the series have short memory): its mean, variance and lag-one
    /// covariance agree within 5 standard errors of the difference (two-sample z test;
    /// standard errors from 200 batch means of 200 cycles; common practice).
    #[test]
    fn joint_and_interval_streams_agree_in_distribution() {
        let layout = [0.002, 0.002, 0.1, 0.002, 0.002, 0.06];
        let cycle: f64 = layout.iter().sum();
        let spec = Spectrum::power_laws(&[(0, 2e-32), (-1, 1e-32), (1, 1e-34), (2, 1e-36)], 1e3);
        let (batches, per) = (200usize, 200usize);
        let cycles = batches * per;
        let run = |joint_max: usize, seed: u64| {
            let mut s = LaserStream::build(&spec, 0.0, &layout, cycles as f64 * cycle, seed, joint_max).unwrap();
            assert_eq!(s.joint.is_some(), joint_max > 0);
            let mut out = vec![0.0; layout.len()];
            (0..cycles)
                .map(|_| {
                    s.next_cycle(&mut out);
                    let total = out.iter().sum::<f64>() / cycle;
                    out.iter().zip(&layout).map(|(j, l)| j / l - total).collect::<Vec<f64>>()
                })
                .collect::<Vec<_>>()
        };
        let a = run(JOINT_MAX_DIM, 5);
        let b = run(0, 6);
        // (value, squared standard error) of the mean of `v` by batch means.
        let batch = |v: &[f64]| {
            let means: Vec<f64> = v.chunks(per).map(|c| c.iter().sum::<f64>() / c.len() as f64).collect();
            let m = means.iter().sum::<f64>() / means.len() as f64;
            let var = means.iter().map(|x| (x - m) * (x - m)).sum::<f64>() / (means.len() - 1) as f64;
            (m, var / means.len() as f64)
        };
        let stats = |d: &[Vec<f64>], i: usize| {
            let xs: Vec<f64> = d.iter().map(|v| v[i]).collect();
            let mean = xs.iter().sum::<f64>() / xs.len() as f64;
            let sq: Vec<f64> = xs.iter().map(|x| (x - mean) * (x - mean)).collect();
            let lag: Vec<f64> = xs.windows(2).map(|w| (w[0] - mean) * (w[1] - mean)).collect();
            [batch(&xs), batch(&sq), batch(&lag)]
        };
        for i in 0..layout.len() {
            let (sa, sb) = (stats(&a, i), stats(&b, i));
            for (what, (x, y)) in ["mean", "variance", "lag-one covariance"].iter().zip(sa.iter().zip(sb.iter())) {
                let se = libm::sqrt(x.1 + y.1);
                assert!((x.0 - y.0).abs() <= 5.0 * se, "interval {i} {what}: joint {} interval-wise {} (se {se})", x.0, y.0);
            }
        }
    }

    /// The paired ziggurat draw against the normal distribution: Pearson's chi-square over
    /// 100 bins of width 0.1 on [-5, 5] plus both tails (probabilities from erfc, libm),
    /// 1e6 draws, critical value at 0.999; the two deviates of one 64-bit draw are
    /// uncorrelated (their mean product within 5 / sqrt(pairs)). Common practice.
    #[test]
    fn paired_ziggurat_deviates_follow_the_normal_distribution() {
        let z = Ziggurat::new();
        let mut rng = Rng::new(31);
        let n = 1_000_000;
        let mut v = vec![0.0; n];
        z.fill(&mut rng, &mut v);
        let bins = 100usize;
        let cdf = |x: f64| 0.5 * libm::erfc(-x / std::f64::consts::SQRT_2);
        let mut counts = vec![0.0; bins + 2];
        for &x in &v {
            assert!(x.is_finite());
            let k = if x < -5.0 { 0 } else if x >= 5.0 { bins + 1 } else { 1 + ((x + 5.0) / 0.1) as usize };
            counts[k.min(bins + 1)] += 1.0;
        }
        let (mut chi2, mut used, mut e_acc, mut o_acc) = (0.0, 0usize, 0.0, 0.0);
        for k in 0..bins + 2 {
            let lo = if k == 0 { 0.0 } else { cdf(-5.0 + (k - 1) as f64 * 0.1) };
            let hi = if k == bins + 1 { 1.0 } else { cdf(-5.0 + k as f64 * 0.1) };
            e_acc += (hi - lo) * n as f64;
            o_acc += counts[k];
            if e_acc >= 5.0 || k == bins + 1 {
                chi2 += (o_acc - e_acc) * (o_acc - e_acc) / e_acc;
                used += 1;
                e_acc = 0.0;
                o_acc = 0.0;
            }
        }
        let crit = chi2_quantile(0.999, (used - 1) as f64).unwrap();
        assert!(chi2 < crit, "chi-square {chi2} over {used} bins exceeds {crit}");
        let pairs = n / 2;
        let prod = (0..pairs).map(|i| v[2 * i] * v[2 * i + 1]).sum::<f64>() / pairs as f64;
        assert!(prod.abs() < 5.0 / (pairs as f64).sqrt(), "pair correlation {prod}");
    }
}
