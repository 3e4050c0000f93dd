//! Errors that name what is wrong, where, and what is allowed.

use serde::Serialize;
use std::fmt;

/// One problem with an input, located by its field path.
///
/// `path` uses dots and brackets (`sequence.segments[2].duration_s`), `value` is the
/// offending value as text, and `allowed` says what would be accepted.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Problem {
    pub path: String,
    pub value: String,
    pub allowed: String,
}

impl fmt::Display for Problem {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}: {}; {}", self.path, self.value, self.allowed)
    }
}

/// Every problem found in an input at once.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct InputError {
    pub problems: Vec<Problem>,
}

impl InputError {
    pub fn single(path: impl Into<String>, value: impl Into<String>, allowed: impl Into<String>) -> Self {
        InputError { problems: vec![Problem { path: path.into(), value: value.into(), allowed: allowed.into() }] }
    }
}

impl fmt::Display for InputError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        for (i, p) in self.problems.iter().enumerate() {
            if i > 0 {
                writeln!(f)?;
            }
            write!(f, "{p}")?;
        }
        Ok(())
    }
}

impl std::error::Error for InputError {}

/// Collects problems while a document is checked, so all of them are reported together.
#[derive(Debug, Default)]
pub struct Checker {
    problems: Vec<Problem>,
}

/// Formats a number the way the messages show it: plain, or NaN/inf spelled out.
pub fn show(x: f64) -> String {
    if x.is_nan() {
        "NaN".into()
    } else if x.is_infinite() {
        if x > 0.0 { "infinity".into() } else { "-infinity".into() }
    } else if x != 0.0 && (x.abs() < 1e-3 || x.abs() >= 1e5) {
        format!("{x:e}")
    } else {
        format!("{x}")
    }
}

impl Checker {
    pub fn new() -> Self {
        Self::default()
    }

    pub fn push(&mut self, path: impl Into<String>, value: impl Into<String>, allowed: impl Into<String>) {
        self.problems.push(Problem { path: path.into(), value: value.into(), allowed: allowed.into() });
    }

    /// A finite number within `[lo, hi]` (inclusive); `unit` is appended to the message.
    pub fn range(&mut self, path: &str, x: f64, lo: f64, hi: f64, unit: &str) -> bool {
        if !x.is_finite() || x < lo || x > hi {
            self.push(path, format!("{} {unit}", show(x)).trim_end().to_string(), format!("must be a finite number from {} to {} {unit}", show(lo), show(hi)).trim_end().to_string());
            false
        } else {
            true
        }
    }

    /// A finite number `> lo` and `<= hi`.
    pub fn above(&mut self, path: &str, x: f64, lo: f64, hi: f64, unit: &str) -> bool {
        if !x.is_finite() || x <= lo || x > hi {
            self.push(path, format!("{} {unit}", show(x)).trim_end().to_string(), format!("must be a finite number above {} and at most {} {unit}", show(lo), show(hi)).trim_end().to_string());
            false
        } else {
            true
        }
    }

    pub fn is_ok(&self) -> bool {
        self.problems.is_empty()
    }

    pub fn finish(self) -> Result<(), InputError> {
        if self.problems.is_empty() { Ok(()) } else { Err(InputError { problems: self.problems }) }
    }
}
