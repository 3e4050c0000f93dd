//! The laser's free-running frequency noise: power-law terms and tabulated spectra.
//!
//! Everything is converted to the one-sided spectral density of fractional frequency
//! S_y(f) = sum_a h_a f^a (IEEE Std 1139-2008), in 1/Hz.
//! Conversions (IEEE Std 1139-2008): S_y = S_nu / nu0^2; S_y(f) = (f/nu0)^2 S_phi(f);
//! L(f) = S_phi(f)/2, so S_phi = 2 * 10^(L/10).

use crate::error::{show, Checker, InputError};
use serde::{Deserialize, Serialize};
use std::f64::consts::{LN_2, PI};

/// Largest number of rows in a tabulated spectrum. Every row is a kink that the Allan
/// integrals split their panels at, so an evaluation's time grows with the rows (about
/// 0.3 ms per row on the build machine with the default 61 averaging times); 200 rows keep
/// one evaluation under 100 ms. A denser measured trace is thinned before import (the
/// Allan deviation averages the spectrum over octaves).
pub const MAX_TABLE_ROWS: usize = 200;
/// Longest line of a spectrum or measured-data CSV, bytes (a row holds two or three
/// numbers; anything far longer is not a row of these files).
pub const MAX_CSV_LINE_BYTES: usize = 1000;

/// Unit of a spectral density value.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum SpectrumUnit {
    /// Fractional frequency noise S_y, 1/Hz.
    SY,
    /// Absolute frequency noise S_nu, Hz^2/Hz.
    SNu,
    /// Single-sideband phase noise L(f), dBc/Hz.
    LDbc,
}

impl SpectrumUnit {
    pub fn describe(self) -> &'static str {
        match self {
            SpectrumUnit::SY => "s_y (1/Hz)",
            SpectrumUnit::SNu => "s_nu (Hz^2/Hz)",
            SpectrumUnit::LDbc => "l_dbc (dBc/Hz)",
        }
    }

    /// Converts a value at Fourier frequency `f` to S_y (1/Hz).
    pub fn to_s_y(self, value: f64, f: f64, nu0: f64) -> f64 {
        match self {
            SpectrumUnit::SY => value,
            SpectrumUnit::SNu => value / (nu0 * nu0),
            SpectrumUnit::LDbc => 2.0 * libm::pow(10.0, value / 10.0) * (f / nu0) * (f / nu0),
        }
    }
}

/// One term of the laser noise model, in the form a person reads it off a plot or a data sheet.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "snake_case", deny_unknown_fields)]
pub enum NoiseTerm {
    /// A power law S(f) = h f^alpha given by its coefficient in the stated unit
    /// (`s_y`: 1/Hz * Hz^-alpha; `s_nu`: Hz^2/Hz * Hz^-alpha).
    PowerLaw { alpha: i32, coefficient: f64, unit: SpectrumUnit },
    /// A power law with exponent alpha given by its level at one Fourier frequency,
    /// in any unit (including L(f) in dBc/Hz).
    PowerLawAt { alpha: i32, at_hz: f64, value: f64, unit: SpectrumUnit },
    /// White frequency noise given by its Allan deviation at 1 s (sigma^2 = h0/(2 tau)).
    WhiteFrequency { sigma_y_1s: f64 },
    /// Flicker frequency noise given by its flat Allan deviation (sigma^2 = 2 ln2 h_-1).
    FlickerFloor { sigma_y: f64 },
    /// Random-walk frequency noise given by its Allan deviation at 1 s
    /// (sigma^2 = (2 pi^2/3) h_-2 tau).
    RandomWalk { sigma_y_1s: f64 },
}

impl NoiseTerm {
    /// The term as (alpha, h_alpha in S_y units).
    pub fn h(&self, nu0: f64) -> (i32, f64) {
        match *self {
            NoiseTerm::PowerLaw { alpha, coefficient, unit } => match unit {
                SpectrumUnit::LDbc => (alpha, unit.to_s_y(coefficient, 1.0, nu0)),
                _ => (alpha, unit.to_s_y(coefficient, 1.0, nu0)),
            },
            NoiseTerm::PowerLawAt { alpha, at_hz, value, unit } => {
                let s = unit.to_s_y(value, at_hz, nu0);
                (alpha, s / libm::pow(at_hz, alpha as f64))
            }
            NoiseTerm::WhiteFrequency { sigma_y_1s } => (0, 2.0 * sigma_y_1s * sigma_y_1s),
            NoiseTerm::FlickerFloor { sigma_y } => (-1, sigma_y * sigma_y / (2.0 * LN_2)),
            NoiseTerm::RandomWalk { sigma_y_1s } => (-2, 3.0 * sigma_y_1s * sigma_y_1s / (2.0 * PI * PI)),
        }
    }

    pub(crate) fn check(&self, path: &str, c: &mut Checker) {
        let alpha_ok = |a: i32| (-2..=2).contains(&a);
        match *self {
            NoiseTerm::PowerLaw { alpha, coefficient, unit } => {
                if !alpha_ok(alpha) {
                    c.push(format!("{path}.alpha"), alpha.to_string(), "must be one of -2, -1, 0, 1, 2");
                }
                if unit == SpectrumUnit::LDbc {
                    c.push(format!("{path}.unit"), "l_dbc", "a coefficient is given as s_y or s_nu; use power_law_at for L(f)");
                } else {
                    c.above(&format!("{path}.coefficient"), coefficient, 0.0, 1e30, "");
                }
            }
            NoiseTerm::PowerLawAt { alpha, at_hz, value, unit } => {
                if !alpha_ok(alpha) {
                    c.push(format!("{path}.alpha"), alpha.to_string(), "must be one of -2, -1, 0, 1, 2");
                }
                c.above(&format!("{path}.at_hz"), at_hz, 0.0, 1e12, "Hz");
                match unit {
                    SpectrumUnit::LDbc => {
                        c.range(&format!("{path}.value"), value, -300.0, 100.0, "dBc/Hz");
                    }
                    _ => {
                        c.above(&format!("{path}.value"), value, 0.0, 1e30, "");
                    }
                }
            }
            NoiseTerm::WhiteFrequency { sigma_y_1s } | NoiseTerm::RandomWalk { sigma_y_1s } => {
                c.above(&format!("{path}.sigma_y_1s"), sigma_y_1s, 0.0, 1e-3, "");
            }
            NoiseTerm::FlickerFloor { sigma_y } => {
                c.above(&format!("{path}.sigma_y"), sigma_y, 0.0, 1e-3, "");
            }
        }
    }
}

/// A measured or data-sheet spectrum: rows of (Fourier frequency in Hz, value in `unit`),
/// interpolated linearly in log-log and extrapolated as the power law of the end rows.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SpectrumTable {
    pub unit: SpectrumUnit,
    /// Rows `[f_hz, value]`, strictly increasing in f.
    pub points: Vec<[f64; 2]>,
}

impl SpectrumTable {
    pub(crate) fn check(&self, path: &str, c: &mut Checker) {
        if self.points.len() < 2 || self.points.len() > MAX_TABLE_ROWS {
            c.push(format!("{path}.points"), format!("{} rows", self.points.len()), format!("must hold 2 to {MAX_TABLE_ROWS} rows"));
            return;
        }
        let mut prev = 0.0;
        for (i, p) in self.points.iter().enumerate() {
            let (f, v) = (p[0], p[1]);
            if !f.is_finite() || f <= 0.0 || f > 1e12 {
                c.push(format!("{path}.points[{i}][0]"), show(f), "Fourier frequency must be finite, above 0 and at most 1e12 Hz");
            } else if f <= prev {
                c.push(format!("{path}.points[{i}][0]"), show(f), format!("frequencies must increase strictly (previous row {})", show(prev)));
            }
            prev = if f.is_finite() { f } else { prev };
            let ok = match self.unit {
                SpectrumUnit::LDbc => v.is_finite() && (-300.0..=100.0).contains(&v),
                _ => v.is_finite() && v > 0.0 && v < 1e30,
            };
            if !ok {
                let allowed = match self.unit {
                    SpectrumUnit::LDbc => "L(f) must be finite, from -300 to 100 dBc/Hz",
                    _ => "spectral density must be finite and above 0",
                };
                c.push(format!("{path}.points[{i}][1]"), show(v), allowed);
            }
        }
    }

    /// Parses a CSV with a header naming the unit: `f_hz,s_y` or `f_hz,s_nu` or `f_hz,l_dbc`.
    /// Blank lines and lines starting with `#` are skipped. Errors name the line number.
    pub fn from_csv(text: &str) -> Result<SpectrumTable, InputError> {
        // A byte-order mark (spreadsheet exports write one) is not part of the header.
        let text = text.strip_prefix('\u{feff}').unwrap_or(text);
        let mut unit = None;
        let mut points = Vec::new();
        let mut c = Checker::new();
        for (i, raw) in text.lines().enumerate() {
            let line_no = i + 1;
            if raw.len() > MAX_CSV_LINE_BYTES {
                return Err(InputError::single(format!("line {line_no}"), format!("{} bytes: {}", raw.len(), clip(raw)), format!("a line holds at most {MAX_CSV_LINE_BYTES} bytes")));
            }
            let line = raw.trim();
            if line.is_empty() || line.starts_with('#') {
                continue;
            }
            let cells: Vec<&str> = line.split([',', ';', '\t']).map(|s| s.trim()).collect();
            if unit.is_none() {
                if cells.len() != 2 || !matches!(cells[0].to_ascii_lowercase().as_str(), "f_hz" | "f" | "frequency_hz") {
                    return Err(InputError::single(
                        format!("line {line_no}"),
                        clip(line),
                        "the header must be two columns: f_hz and one of s_y, s_nu, l_dbc",
                    ));
                }
                unit = Some(match cells[1].to_ascii_lowercase().as_str() {
                    "s_y" => SpectrumUnit::SY,
                    "s_nu" => SpectrumUnit::SNu,
                    "l_dbc" => SpectrumUnit::LDbc,
                    other => {
                        return Err(InputError::single(
                            format!("line {line_no}, column 2"),
                            clip(other),
                            "the unit must be s_y (1/Hz), s_nu (Hz^2/Hz) or l_dbc (dBc/Hz)",
                        ))
                    }
                });
                continue;
            }
            if points.len() >= MAX_TABLE_ROWS {
                return Err(InputError::single(format!("line {line_no}"), "", format!("a table holds at most {MAX_TABLE_ROWS} rows")));
            }
            if cells.len() != 2 {
                c.push(format!("line {line_no}"), clip(line), "each row must hold two numbers: frequency and value");
                continue;
            }
            let f = cells[0].parse::<f64>();
            let v = cells[1].parse::<f64>();
            match (f, v) {
                (Ok(f), Ok(v)) => points.push(([f, v], line_no)),
                _ => c.push(format!("line {line_no}"), clip(line), "each row must hold two numbers: frequency and value"),
            }
            if c.is_ok() {
                continue;
            }
        }
        let Some(unit) = unit else {
            return Err(InputError::single("line 1", "", "the file is empty; expected a header f_hz,<unit>"));
        };
        let table = SpectrumTable { unit, points: points.iter().map(|p| p.0).collect() };
        let mut inner = Checker::new();
        table.check("table", &mut inner);
        if let Err(e) = inner.finish() {
            for p in e.problems {
                // Map "table.points[i][j]" to the CSV line it came from.
                let line = p
                    .path
                    .strip_prefix("table.points[")
                    .and_then(|s| s.split(']').next())
                    .and_then(|s| s.parse::<usize>().ok())
                    .and_then(|i| points.get(i).map(|p| p.1));
                match line {
                    Some(l) => c.push(format!("line {l}"), p.value, p.allowed),
                    None => c.push("table", p.value, p.allowed),
                }
            }
        }
        c.finish()?;
        Ok(table)
    }
}

fn clip(s: &str) -> String {
    let mut out: String = s.chars().take(60).collect();
    if s.chars().count() > 60 {
        out.push('…');
    }
    out
}

/// A spectrum ready for evaluation: S_y(f) in 1/Hz.
#[derive(Debug, Clone, PartialEq)]
pub struct Spectrum {
    /// (alpha, h_alpha) terms in S_y units.
    pub terms: Vec<(i32, f64)>,
    /// Tabulated part as (ln f, ln S_y) with end slopes for extrapolation.
    pub table: Option<LogTable>,
    /// Phase-noise terms (alpha >= 1) and the table vanish above this frequency, Hz.
    pub f_high: f64,
}

/// A table in log-log coordinates.
#[derive(Debug, Clone, PartialEq)]
pub struct LogTable {
    pub ln_f: Vec<f64>,
    pub ln_s: Vec<f64>,
}

impl LogTable {
    fn eval(&self, f: f64) -> f64 {
        let x = libm::log(f);
        let n = self.ln_f.len();
        let (i, j) = if x <= self.ln_f[0] {
            (0, 1)
        } else if x >= self.ln_f[n - 1] {
            (n - 2, n - 1)
        } else {
            let k = self.ln_f.partition_point(|&v| v <= x);
            (k - 1, k)
        };
        let mut slope = (self.ln_s[j] - self.ln_s[i]) / (self.ln_f[j] - self.ln_f[i]);
        if x < self.ln_f[0] {
            // Below the table, the end rows' power law, no steeper than random walk (f^-2):
            // anything steeper would make the Allan variance diverge.
            slope = slope.max(-2.0);
            return libm::exp(self.ln_s[0] + slope * (x - self.ln_f[0]));
        }
        libm::exp(self.ln_s[i] + slope * (x - self.ln_f[i]))
    }
}

impl Spectrum {
    /// Builds S_y from power-law terms (alpha, h in S_y units), no table.
    pub fn power_laws(terms: &[(i32, f64)], f_high: f64) -> Spectrum {
        Spectrum { terms: terms.to_vec(), table: None, f_high }
    }

    /// Builds S_y from a laser description; `nu0` converts absolute and phase units.
    pub fn from_laser(laser: &crate::design::Laser, nu0: f64) -> Spectrum {
        // S_y is linear in the terms: those of one exponent are summed into one, so a laser
        // of many terms costs at most five powers per evaluation of S_y.
        let mut terms: Vec<(i32, f64)> = Vec::new();
        for t in &laser.noise {
            let (a, h) = t.h(nu0);
            match terms.iter_mut().find(|x| x.0 == a) {
                Some(x) => x.1 += h,
                None => terms.push((a, h)),
            }
        }
        let table = laser.table.as_ref().map(|t| {
            let ln_f: Vec<f64> = t.points.iter().map(|p| libm::log(p[0])).collect();
            let ln_s = t.points.iter().map(|p| libm::log(t.unit.to_s_y(p[1], p[0], nu0).max(1e-300))).collect();
            LogTable { ln_f, ln_s }
        });
        Spectrum { terms, table, f_high: laser.high_cutoff_hz }
    }

    /// S_y(f), 1/Hz.
    #[inline]
    pub fn s_y(&self, f: f64) -> f64 {
        self.s_y_and_table(f).0
    }

    /// S_y(f) and its tabulated part alone, from one evaluation of the table, 1/Hz.
    #[inline]
    pub fn s_y_and_table(&self, f: f64) -> (f64, f64) {
        let mut s = 0.0;
        for &(a, h) in &self.terms {
            if a >= 1 && f > self.f_high {
                continue;
            }
            s += h * powi(f, a);
        }
        let t = self.table_s_y(f);
        (s + t, t)
    }

    /// The tabulated part of S_y(f) alone (0 without a table or above the cut-off), 1/Hz.
    #[inline]
    pub fn table_s_y(&self, f: f64) -> f64 {
        match &self.table {
            Some(t) if f <= self.f_high => t.eval(f),
            _ => 0.0,
        }
    }

    /// The spectrum multiplied by a scalar (noise power scaled).
    pub fn scaled(&self, k: f64) -> Spectrum {
        let mut out = self.clone();
        for t in &mut out.terms {
            t.1 *= k;
        }
        if let Some(t) = &mut out.table {
            let lk = libm::log(k);
            for v in &mut t.ln_s {
                *v += lk;
            }
        }
        out
    }

    /// Frequencies where S_y has a kink (table rows, the cut-off), for integration panels.
    pub fn breakpoints(&self) -> Vec<f64> {
        let mut b = vec![self.f_high];
        if let Some(t) = &self.table {
            b.extend(t.ln_f.iter().map(|&x| libm::exp(x)));
        }
        b
    }
}

#[inline]
pub(crate) fn powi(x: f64, a: i32) -> f64 {
    match a {
        -2 => 1.0 / (x * x),
        -1 => 1.0 / x,
        0 => 1.0,
        1 => x,
        2 => x * x,
        _ => libm::pow(x, a as f64),
    }
}
