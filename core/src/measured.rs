//! Measured data: a CSV of fractional frequency or phase, read with clear errors, its gaps
//! found, and its Allan deviation with confidence intervals (from [`crate::estimate`]) ready
//! to lay over the projection. Nothing leaves the machine: the text is parsed in memory.
//!
//! The format (docs/measured-data.md): optional directive lines `# tau0_s: 1.0` and
//! `# nominal_hz: 429228004229873`, other `#` lines are comments; a header row naming the
//! columns with their units, either one value column (evenly spaced at `tau0_s`) or a time
//! column and a value column; then one row per sample. Cells are separated by commas,
//! semicolons or tabs.
//!
//! | column | meaning |
//! |---|---|
//! | `t_s` | time stamp, s |
//! | `t_mjd` | time stamp, Modified Julian Date (days) |
//! | `y` | fractional frequency (dimensionless) |
//! | `df_hz` | frequency offset, Hz (needs `nominal_hz`; y = df / nominal) |
//! | `x_s`, `x_ns`, `x_ps` | phase (time deviation) in s, ns, ps |
//!
//! With time stamps, the sample interval is `tau0_s` when given, else the median spacing;
//! every spacing must be a whole multiple of it within [`GRID_TOLERANCE`]; a multiple k > 1
//! is a gap of k - 1 missing samples (NaN for the estimators, which skip the terms that
//! touch them). An empty value cell or `nan` is a gap sample too.

use crate::error::{show, Checker, InputError, Problem};
use crate::noise::MAX_CSV_LINE_BYTES;
use crate::estimate::{estimate, Estimate, Estimator, Options, Series, MAX_POINTS};
use serde::{Deserialize, Serialize};

/// Largest relative distance of a time-stamp spacing from a whole multiple of tau0.
pub const GRID_TOLERANCE: f64 = 0.1;
/// Most problems reported for one file (the rest are counted).
pub const MAX_REPORTED_PROBLEMS: usize = 20;
/// Most gaps listed one by one in the result (all are counted).
pub const MAX_LISTED_GAPS: usize = 1000;
/// Most missing samples per data row that gaps may add: a series that is mostly gaps has
/// almost no Allan terms free of them, and the cap keeps the work proportional to the file
/// (a few bytes of time stamps cannot ask for 1e8 samples).
pub const MAX_GAP_FACTOR: u64 = 10;
/// Largest text accepted, bytes (about 100 million rows of short numbers would exceed it;
/// the sample cap [`MAX_POINTS`] applies as well).
pub const MAX_TEXT_BYTES: usize = 2_000_000_000;

/// What the values are.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Quantity {
    /// Fractional frequency y (dimensionless).
    Frequency,
    /// Phase (time deviation) x, s.
    Phase,
}

/// A run of missing samples.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Gap {
    /// CSV line of the first row after the gap (or of the empty cell).
    pub line: u64,
    /// Index of the first missing sample in the evenly spaced series.
    pub start_index: u64,
    /// Number of missing samples.
    pub missing: u64,
}

/// Parsed data: evenly spaced values in base units (y, or x in seconds), NaN in gaps.
#[derive(Debug, Clone, PartialEq)]
pub struct MeasuredData {
    pub quantity: Quantity,
    /// Column name of the values as written in the header (`y`, `x_ns`, ...).
    pub unit: String,
    pub tau0_s: f64,
    pub values: Vec<f64>,
    /// Data rows read.
    pub rows: u64,
    pub gaps: Vec<Gap>,
}

/// The imported data's Allan deviation and what was found in the file.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct MeasuredResult {
    pub quantity: Quantity,
    pub unit: String,
    pub tau0_s: f64,
    /// Data rows read.
    pub rows: u64,
    /// Evenly spaced samples, gaps included.
    pub samples: u64,
    /// Missing samples in all.
    pub gap_samples: u64,
    /// Number of gaps (runs of missing samples).
    pub gap_count: u64,
    /// The first [`MAX_LISTED_GAPS`] gaps.
    pub gaps: Vec<Gap>,
    /// Overlapping Allan deviation with confidence intervals.
    pub adev: Estimate,
    /// Findings in sentences.
    pub notes: Vec<String>,
}

fn clip(s: &str) -> String {
    let mut out: String = s.chars().take(60).collect();
    if s.chars().count() > 60 {
        out.push('…');
    }
    out
}

/// Problems collected with a cap; the overflow is counted.
struct Problems {
    list: Vec<Problem>,
    more: u64,
}

impl Problems {
    fn push(&mut self, line: usize, value: &str, allowed: impl Into<String>) {
        if self.list.len() < MAX_REPORTED_PROBLEMS {
            self.list.push(Problem { path: format!("line {line}"), value: clip(value), allowed: allowed.into() });
        } else {
            self.more += 1;
        }
    }
    fn finish(mut self) -> Result<(), InputError> {
        if self.list.is_empty() {
            return Ok(());
        }
        if self.more > 0 {
            self.list.push(Problem { path: "(file)".into(), value: format!("{} more problems", self.more), allowed: format!("only the first {MAX_REPORTED_PROBLEMS} are listed") });
        }
        Err(InputError { problems: self.list })
    }
}

#[derive(Clone, Copy, PartialEq)]
enum TimeCol {
    Seconds,
    Mjd,
}

fn value_column(name: &str) -> Option<(Quantity, f64, bool)> {
    // (quantity, factor to base units, needs nominal frequency)
    match name {
        "y" => Some((Quantity::Frequency, 1.0, false)),
        "df_hz" => Some((Quantity::Frequency, 1.0, true)),
        "x_s" => Some((Quantity::Phase, 1.0, false)),
        "x_ns" => Some((Quantity::Phase, 1e-9, false)),
        "x_ps" => Some((Quantity::Phase, 1e-12, false)),
        _ => None,
    }
}

fn time_column(name: &str) -> Option<TimeCol> {
    match name {
        "t_s" => Some(TimeCol::Seconds),
        "t_mjd" => Some(TimeCol::Mjd),
        _ => None,
    }
}

const HEADER_HELP: &str = "the header names the columns: optionally t_s or t_mjd, then one of y, df_hz, x_s, x_ns, x_ps";

/// Parses a measured-data CSV (module docs). Errors name the line, the cell and what is
/// allowed; at most [`MAX_REPORTED_PROBLEMS`] are listed.
///
/// ```
/// use clockwright_core::measured::{parse_csv, Quantity};
/// let d = parse_csv("# tau0_s: 1\ny\n1e-15\n-2e-15\n\n3e-15\n").unwrap();
/// assert_eq!(d.quantity, Quantity::Frequency);
/// assert_eq!(d.values, vec![1e-15, -2e-15, 3e-15]);
/// let e = parse_csv("t_s,x_ns\n0,1\n2,abc\n").unwrap_err();
/// assert_eq!(e.problems[0].path, "line 3");
/// ```
pub fn parse_csv(text: &str) -> Result<MeasuredData, InputError> {
    // A byte-order mark (spreadsheet exports write one) is not part of the first line.
    let text = text.strip_prefix('\u{feff}').unwrap_or(text);
    if text.len() > MAX_TEXT_BYTES {
        return Err(InputError::single("(file)", format!("{} bytes", text.len()), format!("at most {MAX_TEXT_BYTES} bytes")));
    }
    let mut probs = Problems { list: Vec::new(), more: 0 };
    let mut tau0: Option<f64> = None;
    let mut nominal: Option<f64> = None;
    let mut header: Option<(Option<TimeCol>, String, Quantity, f64, bool, usize)> = None;
    let mut times: Vec<(f64, usize)> = Vec::new();
    let mut vals: Vec<(f64, usize)> = Vec::new();
    for (i, raw) in text.lines().enumerate() {
        let line_no = i + 1;
        if raw.len() > MAX_CSV_LINE_BYTES {
            return Err(InputError::single(format!("line {line_no}"), format!("{} bytes: {}", raw.len(), clip(raw)), format!("a line holds at most {MAX_CSV_LINE_BYTES} bytes")));
        }
        let line = raw.trim();
        if line.is_empty() {
            continue;
        }
        if let Some(rest) = line.strip_prefix('#') {
            if let Some((k, v)) = rest.split_once(':') {
                let key = k.trim().to_ascii_lowercase();
                if key == "tau0_s" || key == "nominal_hz" {
                    if header.is_some() {
                        probs.push(line_no, line, format!("the {key} directive must come before the header row"));
                        continue;
                    }
                    match v.trim().parse::<f64>() {
                        Ok(x) if x.is_finite() && x > 0.0 && x <= 1e17 => {
                            if key == "tau0_s" {
                                tau0 = Some(x);
                            } else {
                                nominal = Some(x);
                            }
                        }
                        _ => probs.push(line_no, line, format!("{key} must be a finite number above 0 and at most 1e17")),
                    }
                }
            }
            continue;
        }
        let cells: Vec<&str> = line.split([',', ';', '\t']).map(|s| s.trim()).collect();
        let names: Vec<String> = cells.iter().map(|c| c.to_ascii_lowercase()).collect();
        let looks_like_header = names.iter().any(|n| value_column(n).is_some() || time_column(n).is_some());
        match &header {
            None => {
                let parsed = match names.len() {
                    1 => value_column(&names[0]).map(|v| (None, names[0].clone(), v)),
                    2 => match (time_column(&names[0]), value_column(&names[1])) {
                        (Some(t), Some(v)) => Some((Some(t), names[1].clone(), v)),
                        _ => None,
                    },
                    _ => None,
                };
                match parsed {
                    Some((t, name, (q, f, needs))) => header = Some((t, name, q, f, needs, line_no)),
                    None => return Err(InputError::single(format!("line {line_no}"), clip(line), HEADER_HELP)),
                }
            }
            Some((_, unit, _, _, _, hl)) if looks_like_header => {
                let other = names.iter().find(|n| value_column(n).is_some()).cloned().unwrap_or_default();
                let what = if !other.is_empty() && &other != unit { format!("mixed units: {other} here after {unit} in the header on line {hl}") } else { format!("a second header row (the header is on line {hl})") };
                probs.push(line_no, line, format!("{what}; one file holds one quantity in one unit"));
            }
            Some((tcol, _, _, _, _, _)) => {
                let want = if tcol.is_some() { 2 } else { 1 };
                if cells.len() != want {
                    probs.push(line_no, line, format!("each row must hold {want} cell{} like the header", if want == 2 { "s" } else { "" }));
                    continue;
                }
                let vcell = cells[want - 1];
                let v = if vcell.is_empty() || vcell.eq_ignore_ascii_case("nan") {
                    Some(f64::NAN)
                } else {
                    match vcell.parse::<f64>() {
                        Ok(x) if x.is_finite() => Some(x),
                        _ => {
                            probs.push(line_no, vcell, "the value must be a finite number (an empty cell or nan marks a missing sample)");
                            None
                        }
                    }
                };
                if let Some(t) = tcol {
                    match cells[0].parse::<f64>() {
                        Ok(x) if x.is_finite() => {
                            let ts = if *t == TimeCol::Mjd { x * 86_400.0 } else { x };
                            if let Some(&(prev, pl)) = times.last() {
                                if ts <= prev {
                                    probs.push(line_no, cells[0], format!("time stamps must increase (line {pl} has {})", show(if *t == TimeCol::Mjd { prev / 86_400.0 } else { prev })));
                                }
                            }
                            times.push((ts, line_no));
                        }
                        _ => probs.push(line_no, cells[0], "the time stamp must be a finite number"),
                    }
                }
                if let Some(v) = v {
                    vals.push((v, line_no));
                }
                if vals.len() > MAX_POINTS {
                    probs.push(line_no, "", format!("at most {MAX_POINTS} samples"));
                    break;
                }
            }
        }
    }
    let Some((tcol, unit, quantity, factor, needs_nominal, _)) = header else {
        return Err(InputError::single("line 1", "", format!("the file holds no header row: {HEADER_HELP}")));
    };
    if needs_nominal && nominal.is_none() {
        probs.push(1, "", "df_hz values need the nominal frequency: add a line # nominal_hz: <Hz> before the header");
    }
    if tcol.is_none() && tau0.is_none() {
        probs.push(1, "", "evenly spaced values need the sample interval: add a line # tau0_s: <seconds> before the header, or a t_s column");
    }
    probs.finish()?;
    let min_rows = if quantity == Quantity::Frequency { 2 } else { 3 };
    let valid = vals.iter().filter(|v| !v.0.is_nan()).count();
    if valid < min_rows {
        return Err(InputError::single(
            "(file)",
            format!("{valid} value{}", if valid == 1 { "" } else { "s" }),
            format!("at least {min_rows} values are needed for an Allan deviation of {}", if quantity == Quantity::Frequency { "frequency" } else { "phase" }),
        ));
    }
    let scale = factor / if needs_nominal { nominal.unwrap_or(1.0) } else { 1.0 };
    let mut values = Vec::with_capacity(vals.len());
    let mut gaps: Vec<Gap> = Vec::new();
    let mut probs = Problems { list: Vec::new(), more: 0 };
    let tau0_s;
    let mut time_gap_samples: u64 = 0;
    if tcol.is_some() {
        tau0_s = match tau0 {
            Some(t) => t,
            None => {
                let mut d: Vec<f64> = times.windows(2).map(|w| w[1].0 - w[0].0).collect();
                d.sort_by(|a, b| a.total_cmp(b));
                d[d.len() / 2]
            }
        };
        if !(tau0_s.is_finite() && tau0_s > 0.0) {
            return Err(InputError::single("t_s", show(tau0_s), "the time stamps give no positive sample interval"));
        }
        for (k, (&(v, line), &(t, _))) in vals.iter().zip(times.iter()).enumerate() {
            if k > 0 {
                let steps = (t - times[k - 1].0) / tau0_s;
                let whole = libm::round(steps);
                if whole < 1.0 || (steps - whole).abs() > GRID_TOLERANCE {
                    probs.push(line, &format!("{}", show(t)), format!("time stamps must lie on a grid of tau0 = {} s (this one is {:.3} intervals after the previous)", show(tau0_s), steps));
                    continue;
                }
                let missing = whole as u64 - 1;
                if missing > 0 {
                    if (values.len() as u64).saturating_add(missing) > MAX_POINTS as u64 {
                        return Err(InputError::single(format!("line {line}"), format!("gap of {missing} samples"), format!("the series with its gaps may hold at most {MAX_POINTS} samples")));
                    }
                    time_gap_samples += missing;
                    let gap_so_far = time_gap_samples;
                    let most = MAX_GAP_FACTOR.saturating_mul(vals.len() as u64).max(1000);
                    if gap_so_far > most {
                        return Err(InputError::single(
                            format!("line {line}"),
                            format!("gap of {missing} samples ({gap_so_far} missing so far)"),
                            format!("gaps may add at most {most} missing samples to this file of {} rows ({MAX_GAP_FACTOR} per data row, at least 1000); check tau0_s and the time stamps", vals.len()),
                        ));
                    }
                    gaps.push(Gap { line: line as u64, start_index: values.len() as u64, missing });
                    values.resize(values.len() + missing as usize, f64::NAN);
                }
            }
            if v.is_nan() {
                push_nan_gap(&mut gaps, line, values.len());
            }
            values.push(v * scale);
        }
        probs.finish()?;
    } else {
        tau0_s = tau0.unwrap_or(1.0);
        for &(v, line) in &vals {
            if v.is_nan() {
                push_nan_gap(&mut gaps, line, values.len());
            }
            values.push(v * scale);
        }
    }
    if values.iter().any(|v| v.is_infinite()) {
        return Err(InputError::single("(file)", "a value", "overflows the double range after unit conversion"));
    }
    Ok(MeasuredData { quantity, unit, tau0_s, values, rows: vals.len() as u64, gaps })
}

/// Records a missing sample at `index`, extending the last gap when it ends right there.
fn push_nan_gap(gaps: &mut Vec<Gap>, line: usize, index: usize) {
    if let Some(g) = gaps.last_mut() {
        if g.start_index + g.missing == index as u64 {
            g.missing += 1;
            return;
        }
    }
    gaps.push(Gap { line: line as u64, start_index: index as u64, missing: 1 });
}

/// Parses the CSV and returns its overlapping Allan deviation with confidence intervals
/// (`options` as for [`estimate`]), the gaps and notes.
///
/// ```
/// use clockwright_core::measured::import_csv;
/// let csv = "# tau0_s: 1\ny\n1\n-1\n1\n-1\n1\n";
/// let r = import_csv(csv, &Default::default()).unwrap();
/// // Alternating +-1: every Allan term at m = 1 is (2)^2 / 2 = 2.
/// assert!((r.adev.points[0].deviation - 2f64.sqrt()).abs() < 1e-12);
/// ```
pub fn import_csv(text: &str, options: &Options) -> Result<MeasuredResult, InputError> {
    let data = parse_csv(text)?;
    analyse(&data, options)
}

/// The Allan deviation of parsed data, with gaps reported.
pub fn analyse(data: &MeasuredData, options: &Options) -> Result<MeasuredResult, InputError> {
    let mut c = Checker::new();
    c.above("tau0_s", data.tau0_s, 0.0, crate::estimate::MAX_TAU0_S, "s");
    c.finish()?;
    let series = match data.quantity {
        Quantity::Frequency => Series::Frequency(&data.values),
        Quantity::Phase => Series::Phase(&data.values),
    };
    let adev = estimate(series, data.tau0_s, Estimator::Allan, options)?;
    let gap_samples: u64 = data.gaps.iter().map(|g| g.missing).sum();
    let mut notes = Vec::new();
    if !data.gaps.is_empty() {
        let first = &data.gaps[0];
        notes.push(format!(
            "{} gap{} with {gap_samples} missing sample{} (the first before line {}); Allan terms touching a gap are left out.",
            data.gaps.len(),
            if data.gaps.len() == 1 { "" } else { "s" },
            if gap_samples == 1 { "" } else { "s" },
            first.line
        ));
    }
    if !adev.skipped_m.is_empty() {
        notes.push(format!("{} averaging factors had no term free of gaps and are left out.", adev.skipped_m.len()));
    }
    let out = MeasuredResult {
        quantity: data.quantity,
        unit: data.unit.clone(),
        tau0_s: data.tau0_s,
        rows: data.rows,
        samples: data.values.len() as u64,
        gap_samples,
        gap_count: data.gaps.len() as u64,
        gaps: data.gaps.iter().take(MAX_LISTED_GAPS).cloned().collect(),
        adev,
        notes,
    };
    crate::finite::require_finite(&out, "result")?;
    Ok(out)
}
