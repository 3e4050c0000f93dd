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

/// Most problems one check lists; the rest are counted in a last problem, so a document
/// with thousands of bad rows still gets a short, readable answer.
pub const MAX_PROBLEMS: usize = 100;

/// Longest text of one message part taken from the input (a schema error quoting a
/// field name, a path through the document), characters.
pub const MAX_QUOTED_CHARS: usize = 200;

/// `s` cut to `n` characters, with an ellipsis when something was cut.
pub fn clip(s: &str, n: usize) -> String {
    let mut out: String = s.chars().take(n).collect();
    if s.chars().nth(n).is_some() {
        out.push('…');
    }
    out
}

/// Collects problems while a document is checked, so all of them are reported together
/// (the first [`MAX_PROBLEMS`], and how many more).
#[derive(Debug, Default)]
pub struct Checker {
    problems: Vec<Problem>,
    more: usize,
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
        if self.problems.len() < MAX_PROBLEMS {
            self.problems.push(Problem { path: path.into(), value: value.into(), allowed: allowed.into() });
        } else {
            self.more += 1;
        }
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

    pub fn finish(mut self) -> Result<(), InputError> {
        if self.more > 0 {
            self.problems.push(Problem { path: "(more)".into(), value: format!("{} more problems", self.more), allowed: format!("only the first {MAX_PROBLEMS} are listed") });
        }
        if self.problems.is_empty() { Ok(()) } else { Err(InputError { problems: self.problems }) }
    }
}

/// Checks the size of a JSON document before it is read into its schema: at most
/// `max_values` values (objects, lists, numbers, texts...) and `max_text` characters of text
/// in all, so an oversized document is refused at once, whatever its shape.
pub fn check_document_size(value: &serde_json::Value, path: &str, max_values: usize, max_text: usize) -> Result<(), InputError> {
    let mut stack = vec![value];
    let (mut values, mut text) = (0usize, 0usize);
    while let Some(v) = stack.pop() {
        values += 1;
        match v {
            serde_json::Value::Array(a) => stack.extend(a.iter()),
            serde_json::Value::Object(m) => {
                for (k, x) in m {
                    text += k.len();
                    stack.push(x);
                }
            }
            serde_json::Value::String(s) => text += s.len(),
            _ => {}
        }
        if values > max_values {
            return Err(InputError::single(path, format!("more than {max_values} values"), format!("a document of this kind holds at most {max_values} values (numbers, texts, lists and groups)")));
        }
        if text > max_text {
            return Err(InputError::single(path, format!("more than {max_text} bytes of text"), format!("a document of this kind holds at most {max_text} bytes of names, labels and keys")));
        }
    }
    Ok(())
}
