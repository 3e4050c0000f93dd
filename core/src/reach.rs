//! What a pair of clocks can measure: a bound on the drift of the fine-structure constant,
//! the reach in the linear coupling d_e of ultralight scalar dark matter, and the height
//! resolution of chronometric levelling.
//!
//! **Drift of alpha.** Fit model: weighted least squares of the session means of the ratio
//! on time, y_k = c + s t_k, with t_k the session centres and per-session variance
//! sigma_k^2 = sigma_R^2(uptime x session length) + sigma_sys^2 (the ratio's Allan variance
//! at the session's live time, which equals the variance of the session mean for white
//! frequency noise, plus the systematic uncertainty per session, independent between
//! sessions). The slope's 1-sigma uncertainty is sigma_s = 1 / sqrt(sum_k w_k (t_k - t_w)^2),
//! w_k = 1/sigma_k^2, t_w the weighted mean time. Since d ln(nu_a/nu_b)/dt =
//! (K_a - K_b) (1/alpha) d alpha/dt, the bound on (1/alpha) d alpha/dt is sigma_s / |K_a - K_b|,
//! given per Julian year (365.25 d). Identical K (or unknown K, or one session): "no
//! sensitivity", never a division by zero.
//!
//! **Ultralight scalar dark matter** (Phys. Rev. D 91, 015015 (2015)). A scalar field
//! phi = phi_0 cos(m t) with energy density rho = m^2 phi_0^2 / 2 (natural units,
//! hbar = c = 1) and the linear coupling delta alpha / alpha = d_e kappa phi,
//! kappa = sqrt(4 pi G), makes alpha oscillate with amplitude
//! A_alpha = d_e sqrt(4 pi G) sqrt(2 rho) / m = d_e sqrt(8 pi G rho) / m.
//! With units restored: G rho_E / c^2 has the unit s^-2 (rho_E the energy density in J/m^3)
//! and m becomes the angular frequency omega = m c^2 / hbar = m_eV e / hbar, so
//! A_alpha / d_e = sqrt(8 pi G rho_E / c^2) hbar / (m_eV e)      (dimensionless),
//! evaluated with CODATA 2018 constants ([`codata`]); rho_E = rho [GeV/cm^3] x 1e9 e x 1e6.
//! At m = 1e-22 eV and 0.4 GeV/cm^3 this is 7.2e-9 per unit d_e. The ratio then oscillates
//! at f = m_eV e / h with fractional amplitude |K_a R_a(f) - K_b R_b(f)| A_alpha, R(f) the
//! probe's complex response to a modulation of the atomic frequency at f,
//! R(f) = int g(t) exp(-2 pi i f t) dt / int g(t) dt over the cycle (the analysis uses the
//! in-loop error signals, so the servo does not filter the signal; common practice).
//!
//! Sensitivity to the amplitude (one quadrature, 1 sigma) of a sinusoid of known frequency
//! in noise of one-sided spectral density S over a live time T_live is sqrt(S/T_live);
//! S is taken from the ratio's Allan variance at tau_f = 1/(2f) as S = 2 tau_f sigma_R^2(tau_f)
//! (exact for white frequency noise; tau_f kept between one cycle and the campaign span).
//! The field is coherent for tau_coh = N_coh / f (N_coh about 1e6 periods, from the
//! virial velocity spread v^2/c^2 ~ 1e-6). When the campaign spans more than tau_coh, the
//! data split into N = span/tau_coh incoherent stretches whose powers add, so the
//! amplitude sensitivity improves only as N^(-1/4): sigma_A = sqrt(S/T_live) N^(1/4)
//! (scaling span^-1/2 below the coherence time, span^-1/4 above). Below the coherence time
//! the amplitude of the one realisation is random (Nat. Commun. 12, 7321 (2021)):
//! its square is exponentially distributed about the mean, so the coupling that is
//! reached with probability p is larger by 1/sqrt(-ln p) (4.4 for p = 0.95; 1 above the
//! coherence time, where many realisations average; the model steps there). Campaigns
//! shorter than one period cannot separate the oscillation from the ratio's offset; the
//! slope it leaves over the span gives the loss factor sqrt(1 + 12/(2 pi f span)^2)
//! (the two limits derived here; the interpolation between them is common practice).
//! Reach: d_e = z sigma_A L / (K_eff A_alpha per unit d_e).
//!
//! **Chronometric levelling.** Height resolution Delta h = c^2 sigma_R(tau) / g and the
//! averaging time at which it reaches the target (1 cm by default).

use crate::error::{show, Checker, InputError};
use crate::pair::{Comparison, PairDocument, PairOptions, Ratio};
use num_complex::Complex64;
use serde::{Deserialize, Serialize};
use std::f64::consts::PI;

/// CODATA 2018 values of the constants used here (Rev. Mod. Phys. 93, 025010 (2021), "CODATA
/// recommended values of the fundamental physical constants: 2018"); c, h, e are exact in the SI.
pub mod codata {
    /// Speed of light in vacuum, m/s.
    pub const C_M_S: f64 = 299_792_458.0;
    /// Planck constant, J s.
    pub const H_J_S: f64 = 6.626_070_15e-34;
    /// Elementary charge, C.
    pub const E_C: f64 = 1.602_176_634e-19;
    /// Newtonian constant of gravitation, m^3 kg^-1 s^-2.
    pub const G_SI: f64 = 6.674_30e-11;
    /// Reduced Planck constant h / (2 pi), J s.
    pub const HBAR_J_S: f64 = H_J_S / (2.0 * core::f64::consts::PI);
}

/// Standard acceleration of gravity, m/s^2 (conventional value, 3rd CGPM (1901)).
pub const STANDARD_GRAVITY_M_S2: f64 = 9.806_65;
/// Julian year, s.
pub const YEAR_S: f64 = 365.25 * 86_400.0;
/// Mass range of the dark-matter reach, eV.
pub const MASS_MIN_EV: f64 = 1e-24;
pub const MASS_MAX_EV: f64 = 1e-14;
/// Most masses in one reach curve.
pub const MAX_MASS_POINTS: usize = 2000;
/// Most points of the levelling curve.
pub const MAX_LEVELLING_POINTS: usize = 400;
/// Longest averaging time searched for the levelling target, s.
pub const MAX_LEVELLING_TAU_S: f64 = 1e9;
/// Most sub-panels of the probe-response integral over one cycle (beyond it, modulations
/// much faster than the probe are resolved more coarsely; their response is small).
pub const MAX_RESPONSE_PANELS: usize = 20_000;

/// Options of the reach.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ReachOptions {
    /// Local dark-matter density, GeV/cm^3.
    #[serde(default = "default_rho")]
    pub rho_dm_gev_per_cm3: f64,
    /// Coherence time of the field in oscillation periods.
    #[serde(default = "default_coherence")]
    pub coherence_periods: f64,
    /// Probability with which the stochastic amplitude of the field reaches the stated
    /// coupling below the coherence time (0 switches the stochastic factor off).
    #[serde(default = "default_confidence")]
    pub stochastic_confidence: f64,
    /// Masses of the reach curve, log-spaced from `mass_min_ev` to `mass_max_ev`.
    #[serde(default = "default_mass_points")]
    pub mass_points: usize,
    #[serde(default = "default_mass_min")]
    pub mass_min_ev: f64,
    #[serde(default = "default_mass_max")]
    pub mass_max_ev: f64,
    /// Local acceleration of gravity, m/s^2.
    #[serde(default = "default_gravity")]
    pub gravity_m_s2: f64,
    /// Height resolution whose reaching time is reported, m.
    #[serde(default = "default_height")]
    pub height_target_m: f64,
    /// Grid of the levelling curve.
    #[serde(default = "default_points")]
    pub tau_points: usize,
    #[serde(default = "default_tau_max")]
    pub tau_max_s: f64,
}

fn default_rho() -> f64 {
    0.4
}
fn default_coherence() -> f64 {
    1e6
}
fn default_confidence() -> f64 {
    0.95
}
fn default_mass_points() -> usize {
    101
}
fn default_mass_min() -> f64 {
    MASS_MIN_EV
}
fn default_mass_max() -> f64 {
    MASS_MAX_EV
}
fn default_gravity() -> f64 {
    STANDARD_GRAVITY_M_S2
}
fn default_height() -> f64 {
    0.01
}
fn default_points() -> usize {
    61
}
fn default_tau_max() -> f64 {
    1e6
}

impl Default for ReachOptions {
    fn default() -> Self {
        ReachOptions {
            rho_dm_gev_per_cm3: default_rho(),
            coherence_periods: default_coherence(),
            stochastic_confidence: default_confidence(),
            mass_points: default_mass_points(),
            mass_min_ev: MASS_MIN_EV,
            mass_max_ev: MASS_MAX_EV,
            gravity_m_s2: STANDARD_GRAVITY_M_S2,
            height_target_m: default_height(),
            tau_points: default_points(),
            tau_max_s: default_tau_max(),
        }
    }
}

impl ReachOptions {
    fn check(&self, cycle: f64) -> Result<(), InputError> {
        let mut c = Checker::new();
        c.above("options.rho_dm_gev_per_cm3", self.rho_dm_gev_per_cm3, 0.0, 1e3, "GeV/cm^3");
        c.range("options.coherence_periods", self.coherence_periods, 1.0, 1e12, "");
        if !(self.stochastic_confidence == 0.0 || (self.stochastic_confidence >= 0.5 && self.stochastic_confidence <= 0.999)) {
            c.push("options.stochastic_confidence", show(self.stochastic_confidence), "must be 0 (no stochastic factor) or from 0.5 to 0.999");
        }
        if self.mass_points < 2 || self.mass_points > MAX_MASS_POINTS {
            c.push("options.mass_points", self.mass_points.to_string(), format!("must be from 2 to {MAX_MASS_POINTS}"));
        }
        let a = c.range("options.mass_min_ev", self.mass_min_ev, MASS_MIN_EV, MASS_MAX_EV, "eV");
        let b = c.range("options.mass_max_ev", self.mass_max_ev, MASS_MIN_EV, MASS_MAX_EV, "eV");
        if a && b && self.mass_max_ev <= self.mass_min_ev {
            c.push("options.mass_max_ev", format!("{} eV", show(self.mass_max_ev)), format!("must exceed mass_min_ev ({} eV)", show(self.mass_min_ev)));
        }
        c.range("options.gravity_m_s2", self.gravity_m_s2, 1.0, 30.0, "m/s^2");
        c.above("options.height_target_m", self.height_target_m, 0.0, 1e4, "m");
        if self.tau_points < 2 || self.tau_points > MAX_LEVELLING_POINTS {
            c.push("options.tau_points", self.tau_points.to_string(), format!("must be from 2 to {MAX_LEVELLING_POINTS}"));
        }
        if c.range("options.tau_max_s", self.tau_max_s, 0.0, crate::budget::caps::MAX_TAU_S, "s") && self.tau_max_s <= cycle {
            c.push("options.tau_max_s", format!("{} s", show(self.tau_max_s)), format!("must exceed one comparison cycle ({} s)", show(cycle)));
        }
        c.finish()
    }
}

/// The bound on the drift of alpha.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DriftBound {
    /// K_a - K_b, when both are known.
    pub delta_k: Option<f64>,
    /// Live time per session, s.
    pub session_live_time_s: f64,
    /// Statistical uncertainty of one session mean (the ratio's Allan deviation at the live time).
    pub session_statistical: f64,
    /// Total uncertainty of one session mean, systematic included.
    pub session_total: f64,
    /// 1-sigma uncertainty of the ratio's fractional drift, per year (None for one session).
    pub ratio_drift_per_year: Option<f64>,
    /// 1-sigma bound on (1/alpha) d alpha/dt, per year (None: no sensitivity, see `note`).
    pub alpha_drift_per_year: Option<f64>,
    pub fit_model: String,
    pub note: String,
}

/// Reach in d_e against the field's mass.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DarkMatterReach {
    pub mass_ev: Vec<f64>,
    /// Oscillation frequency of alpha, Hz.
    pub frequency_hz: Vec<f64>,
    /// Amplitude of delta alpha/alpha per unit d_e.
    pub alpha_amplitude_per_d_e: Vec<f64>,
    /// The ratio's one-sided noise density at f, S = 2 tau_f sigma_R^2(tau_f), 1/Hz.
    pub ratio_psd_per_hz: Vec<f64>,
    /// 1-sigma sensitivity to the ratio's fractional oscillation amplitude.
    pub ratio_amplitude: Vec<f64>,
    /// Effective sensitivity coefficient |K_a R_a(f) - K_b R_b(f)|.
    pub k_effective: Vec<f64>,
    /// Coherence time of the field, s.
    pub coherence_time_s: Vec<f64>,
    /// Whether the campaign is shorter than the coherence time (stochastic factor applied).
    pub within_coherence: Vec<bool>,
    /// Projected reach in d_e; `None` where there is no sensitivity.
    pub d_e: Vec<Option<f64>>,
    pub note: String,
}

/// Height resolution of chronometric levelling.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Levelling {
    pub tau_s: Vec<f64>,
    /// c^2 sigma_R(tau)/g, m.
    pub height_m: Vec<f64>,
    pub target_m: f64,
    /// Averaging time at which the height resolution reaches the target, s.
    pub time_to_target_s: Option<f64>,
    pub note: String,
    /// Height resolution at the single-clock checkpoints (1 s, 1000 s, one day).
    pub checkpoints: Vec<HeightCheckpoint>,
}

/// Height resolution at one named averaging time.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct HeightCheckpoint {
    /// Averaging time, s.
    pub tau_s: f64,
    /// c^2 sigma_R(tau)/g, m; `None` below one comparison cycle.
    pub height_m: Option<f64>,
}

/// Everything a pair reaches.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Reach {
    /// Campaign span from the first session's start to the last session's end, s.
    pub campaign_span_s: f64,
    /// Time with valid data, s.
    pub live_time_s: f64,
    pub drift: DriftBound,
    pub dark_matter: DarkMatterReach,
    pub levelling: Levelling,
    /// The assumptions behind the numbers, in sentences.
    pub assumptions: Vec<String>,
}

/// Amplitude of delta alpha / alpha per unit d_e for a field of mass `mass_ev` (eV) making up
/// the local dark-matter density `rho_gev_per_cm3`: sqrt(8 pi G rho_E / c^2) hbar / (m e)
/// (derivation in the module documentation).
pub fn alpha_amplitude_per_d_e(mass_ev: f64, rho_gev_per_cm3: f64) -> f64 {
    use codata::*;
    let rho_j_m3 = rho_gev_per_cm3 * 1e9 * E_C * 1e6;
    libm::sqrt(8.0 * PI * G_SI * rho_j_m3 / (C_M_S * C_M_S)) * HBAR_J_S / (mass_ev * E_C)
}

/// Oscillation frequency of a field of mass `mass_ev`: f = m c^2 / h, Hz.
pub fn field_frequency_hz(mass_ev: f64) -> f64 {
    mass_ev * codata::E_C / codata::H_J_S
}

/// Weighted least-squares fit of y = c + s t: returns (s, 1-sigma uncertainty of s).
/// `None` with fewer than two distinct times.
pub fn fit_line(t: &[f64], y: &[f64], sigma: &[f64]) -> Option<(f64, f64)> {
    let n = t.len().min(y.len()).min(sigma.len());
    let (mut sw, mut swt, mut swy) = (0.0, 0.0, 0.0);
    for k in 0..n {
        let w = 1.0 / (sigma[k] * sigma[k]);
        sw += w;
        swt += w * t[k];
        swy += w * y[k];
    }
    if n < 2 || !(sw > 0.0) {
        return None;
    }
    let (tm, ym) = (swt / sw, swy / sw);
    let (mut stt, mut sty) = (0.0, 0.0);
    for k in 0..n {
        let w = 1.0 / (sigma[k] * sigma[k]);
        stt += w * (t[k] - tm) * (t[k] - tm);
        sty += w * (t[k] - tm) * (y[k] - ym);
    }
    if !(stt > 0.0) {
        return None;
    }
    Some((sty / stt, 1.0 / libm::sqrt(stt)))
}

/// Complex response of a clock to a modulation of its atomic frequency at `f_hz`:
/// R(f) = int g(t) exp(-2 pi i f t) dt / int g(t) dt over one cycle (R(0) = 1), integrated
/// with 8-point Gauss-Legendre on sub-panels of each polynomial piece of g.
pub fn probe_response(gf: &crate::sensitivity::SensitivityFunction, f_hz: f64) -> Complex64 {
    let g_int = gf.integral();
    if g_int == 0.0 {
        return Complex64::new(0.0, 0.0);
    }
    let total_len: f64 = gf.pieces.iter().filter(|p| !p.coef.is_empty()).map(|p| p.h).sum();
    // Sub-panels: four per period of the modulation (8-point Gauss-Legendre on a quarter
    // period is exact to rounding), within the cap.
    let per_s = (4.0 * f_hz.abs()).min(MAX_RESPONSE_PANELS as f64 / total_len.max(1e-300));
    let mut acc = Complex64::new(0.0, 0.0);
    for p in gf.pieces.iter().filter(|p| !p.coef.is_empty()) {
        let n = (libm::ceil(per_s * p.h) as usize).max(1);
        let w = 1.0 / n as f64;
        for k in 0..n {
            let c = (k as f64 + 0.5) * w;
            for (x, wt) in crate::allan::GL8 {
                let s = c + x * w / 2.0;
                let t = p.t0 + s * p.h;
                let ph = -2.0 * PI * f_hz * t;
                acc += Complex64::new(libm::cos(ph), libm::sin(ph)) * (p.eval(s) * wt * w / 2.0 * p.h);
            }
        }
    }
    acc / g_int
}

fn log_grid(a: f64, b: f64, n: usize) -> Vec<f64> {
    let (la, lb) = (libm::log(a), libm::log(b));
    // The ends exactly a and b (exp(ln b) may round above a cap).
    (0..n).map(|k| if k == 0 { a } else if k == n - 1 { b } else { libm::exp(la + (lb - la) * k as f64 / (n - 1) as f64) }).collect()
}

/// What the pair reaches over its campaign: drift bound, dark-matter reach and levelling.
pub fn reach(doc: &PairDocument, opt: &ReachOptions) -> Result<Reach, InputError> {
    doc.validate()?;
    let cycle = doc.comparison_cycle_s();
    opt.check(cycle)?;
    let (ratio, _, _) = Ratio::prepare(doc)?;
    let k = &doc.campaign;
    let live_session = k.uptime * k.session_length_s;
    if live_session < cycle {
        return Err(InputError::single(
            "pair.campaign.uptime",
            show(k.uptime),
            format!("times the session length ({} s) gives {} s of data per session, less than one comparison cycle ({} s)", show(k.session_length_s), show(live_session), show(cycle)),
        ));
    }
    let span = k.span_s();
    let live = k.live_time_s();
    let (ka, kb) = (doc.a.k_alpha(), doc.b.k_alpha());
    let delta_k = match (ka, kb) {
        (Some(x), Some(y)) => Some(x - y),
        _ => None,
    };
    let k_scale = ka.unwrap_or(0.0).abs().max(kb.unwrap_or(0.0).abs());
    let no_sensitivity = |dk: f64| dk.abs() <= 1e-12 * k_scale.max(1e-300);

    // Drift of alpha.
    let stat = libm::sqrt(ratio.at(&[live_session])?[0].total);
    let sys = k.systematic_per_session;
    let per_session = libm::sqrt(stat * stat + sys * sys);
    let times = k.session_centres_s();
    let sig = vec![per_session; times.len()];
    let zeros = vec![0.0; times.len()];
    let ratio_drift = fit_line(&times, &zeros, &sig).map(|(_, s)| s * YEAR_S);
    let (alpha_drift, note) = match (ratio_drift, delta_k) {
        (None, _) => (None, "One session cannot constrain a drift: no sensitivity.".to_string()),
        (Some(_), None) => (None, "K_alpha is not known for both clocks (set transition.species or transition.k_alpha): no sensitivity to alpha.".to_string()),
        (Some(_), Some(dk)) if no_sensitivity(dk) => (None, "K_a = K_b: the ratio does not depend on alpha, no sensitivity.".to_string()),
        (Some(r), Some(dk)) => (Some(r / dk.abs()), format!("1-sigma bound from {} sessions over {:.3} years through K_a - K_b = {dk:.4}.", k.sessions, span / YEAR_S)),
    };
    let drift = DriftBound {
        delta_k,
        session_live_time_s: live_session,
        session_statistical: stat,
        session_total: per_session,
        ratio_drift_per_year: ratio_drift,
        alpha_drift_per_year: alpha_drift,
        fit_model: "Weighted least squares of the session means on time (offset and slope); each session mean carries the ratio's Allan deviation at its live time and the systematic uncertainty per session, independent between sessions.".into(),
        note,
    };

    // Dark matter.
    let masses = log_grid(opt.mass_min_ev, opt.mass_max_ev, opt.mass_points);
    let freqs: Vec<f64> = masses.iter().map(|&m| field_frequency_hz(m)).collect();
    let tau_f: Vec<f64> = freqs.iter().map(|&f| (0.5 / f).max(cycle).min(span.min(crate::budget::caps::MAX_TAU_S))).collect();
    let sig_f = ratio.at(&tau_f)?;
    let z_stoch = if opt.stochastic_confidence > 0.0 { 1.0 / libm::sqrt(-libm::log(opt.stochastic_confidence)) } else { 1.0 };
    let (mut amp, mut keff, mut tcoh, mut within, mut de, mut per_de, mut psd) = (vec![], vec![], vec![], vec![], vec![], vec![], vec![]);
    for (i, &m) in masses.iter().enumerate() {
        let f = freqs[i];
        let s_eq = 2.0 * tau_f[i] * sig_f[i].total;
        let coh = opt.coherence_periods / f;
        let n_coh = span / coh;
        let mut sigma_a = libm::sqrt(s_eq / live);
        if n_coh > 1.0 {
            sigma_a *= libm::pow(n_coh, 0.25);
        }
        let loss = libm::sqrt(1.0 + 12.0 / ((2.0 * PI * f * span) * (2.0 * PI * f * span)));
        sigma_a *= loss;
        let k_eff = match (ka, kb) {
            (Some(x), Some(y)) => {
                let (ra, rb) = match &ratio.sensitivity {
                    Some((ga, gb)) => (probe_response(ga, f), probe_response(gb, f)),
                    None => {
                        let t = match doc.comparison {
                            Comparison::Correlation { dark_time_s } => dark_time_s,
                            _ => 0.0,
                        };
                        let u = PI * f * t;
                        let s = if u.abs() < 1e-8 { 1.0 } else { libm::sin(u) / u };
                        (Complex64::new(s, 0.0), Complex64::new(s, 0.0))
                    }
                };
                libm::sqrt((ra * x - rb * y).norm_sqr())
            }
            _ => 0.0,
        };
        let a1 = alpha_amplitude_per_d_e(m, opt.rho_dm_gev_per_cm3);
        let z = if n_coh < 1.0 { z_stoch } else { 1.0 };
        let reach = if delta_k.map(|d| !no_sensitivity(d)).unwrap_or(false) && k_eff > 1e-12 * k_scale {
            let v = z * sigma_a / (k_eff * a1);
            if v.is_finite() { Some(v) } else { None }
        } else {
            None
        };
        amp.push(sigma_a);
        psd.push(s_eq);
        keff.push(k_eff);
        tcoh.push(coh);
        within.push(n_coh < 1.0);
        de.push(reach);
        per_de.push(a1);
    }
    let dm_note = if de.iter().all(|x| x.is_none()) {
        "No sensitivity to d_e: K_alpha is unknown for a clock or the same for both.".to_string()
    } else {
        format!("d_e at which the ratio's oscillation amplitude equals its 1-sigma amplitude sensitivity{}.", if opt.stochastic_confidence > 0.0 { format!(", raised below the coherence time so that the random field amplitude reaches it with probability {}", opt.stochastic_confidence) } else { String::new() })
    };
    let dark_matter = DarkMatterReach { mass_ev: masses, frequency_hz: freqs, alpha_amplitude_per_d_e: per_de, ratio_psd_per_hz: psd, ratio_amplitude: amp, k_effective: keff, coherence_time_s: tcoh, within_coherence: within, d_e: de, note: dm_note };

    // Levelling.
    let c2g = codata::C_M_S * codata::C_M_S / opt.gravity_m_s2;
    let taus = log_grid(cycle, opt.tau_max_s, opt.tau_points);
    let pts = ratio.at(&taus)?;
    let height_m: Vec<f64> = pts.iter().map(|p| c2g * libm::sqrt(p.total)).collect();
    let target = opt.height_target_m;
    let (time_to_target_s, lnote) = levelling_time(&ratio, cycle, c2g, target)?;
    let checkpoints = crate::pair::ratio_checkpoints(&ratio)?.into_iter().map(|c| HeightCheckpoint { tau_s: c.tau_s, height_m: c.sigma.map(|s| c2g * s) }).collect();
    let levelling = Levelling { tau_s: taus, height_m, target_m: target, time_to_target_s, note: lnote, checkpoints };

    let mut assumptions = vec![
        drift.fit_model.clone(),
        format!("Dark matter: linear coupling d_e to alpha, local density {} GeV/cm^3, coherence over {:e} periods, CODATA 2018 constants; the analysis keeps the atoms' response (in-loop error signals).", opt.rho_dm_gev_per_cm3, opt.coherence_periods),
        "Amplitude sensitivity sqrt(S/T_live) with S = 2 tau sigma_R^2(tau) at tau = 1/(2f); N^(1/4) worse beyond the coherence time; campaigns shorter than a period lose the offset-degenerate part.".into(),
        format!("Levelling: height resolution c^2 sigma_R(tau)/g with g = {} m/s^2.", opt.gravity_m_s2),
    ];
    if k.systematic_per_session > 0.0 {
        assumptions.push("The systematic uncertainty per session is independent from session to session.".into());
    }
    let out = Reach { campaign_span_s: span, live_time_s: live, drift, dark_matter, levelling, assumptions };
    crate::finite::require_finite(&out, "result")?;
    Ok(out)
}

/// Averaging time at which c^2 sigma_R(tau)/g falls to `target` and stays below (on a grid to
/// [`MAX_LEVELLING_TAU_S`], then bisection in log tau).
fn levelling_time(ratio: &Ratio, cycle: f64, c2g: f64, target: f64) -> Result<(Option<f64>, String), InputError> {
    let grid = log_grid(cycle, MAX_LEVELLING_TAU_S.max(cycle * 2.0), 200);
    let h: Vec<f64> = ratio.at(&grid)?.iter().map(|p| c2g * libm::sqrt(p.total)).collect();
    match h.iter().rposition(|&x| x > target) {
        None => Ok((Some(grid[0]), "below the target from the first cycle on".into())),
        Some(i) if i + 1 == grid.len() => Ok((None, format!("the height resolution stays above {} m up to {:e} s", show(target), MAX_LEVELLING_TAU_S))),
        Some(i) => {
            let (mut a, mut b) = (libm::log(grid[i]), libm::log(grid[i + 1]));
            for _ in 0..60 {
                let mid = 0.5 * (a + b);
                let v = c2g * libm::sqrt(ratio.at(&[libm::exp(mid)])?[0].total);
                if v > target { a = mid } else { b = mid }
                if b - a < 1e-9 {
                    break;
                }
            }
            Ok((Some(libm::exp(b)), "found on the ratio's curve".into()))
        }
    }
}

/// The default pair options matching the reach's levelling grid.
pub fn pair_options(opt: &ReachOptions) -> PairOptions {
    PairOptions { tau_points: opt.tau_points, tau_max_s: opt.tau_max_s }
}
