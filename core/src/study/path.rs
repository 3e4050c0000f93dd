//! Field paths into a design document, written the way validation errors name fields:
//! dots between field names and brackets around list indices, for example `atoms.count`,
//! `sequence.segments[2].duration_s`, `laser.noise[0].sigma_y`, `detection.rounds`,
//! `laser.table.points[3][1]`.
//!
//! A path is resolved on the design's JSON form, so any numeric field of the schema can be
//! studied without a list of names. Whole-number fields (`atoms.count`, `detection.rounds`,
//! `alpha`) take the nearest whole number of the value set.

use crate::design::Design;
use crate::error::{show, InputError};
use serde::Deserialize;
use serde_json::{Number, Value};

/// Longest path text, characters.
pub const MAX_PATH_CHARS: usize = 200;

/// One step of a path.
#[derive(Debug, Clone, PartialEq)]
pub enum Key {
    Field(String),
    Index(usize),
}

/// A parsed field path.
#[derive(Debug, Clone, PartialEq)]
pub struct FieldPath {
    /// The path as written.
    pub text: String,
    keys: Vec<Key>,
}

/// What kind of number a field holds.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum NumberKind {
    /// A real number.
    Real,
    /// A whole number (set values are rounded to the nearest one).
    Whole,
}

impl FieldPath {
    /// Parses `text`; `at` names where the path was given (for the error).
    pub fn parse(text: &str, at: &str) -> Result<FieldPath, InputError> {
        let bad = |why: &str| InputError::single(at, format!("\"{}\"", clip(text)), format!("must be a field path such as sequence.segments[2].duration_s: {why}"));
        if text.is_empty() || text.chars().count() > MAX_PATH_CHARS {
            return Err(bad(&format!("1 to {MAX_PATH_CHARS} characters")));
        }
        let mut keys = Vec::new();
        let b = text.as_bytes();
        let mut i = 0;
        let mut expect_name = true;
        while i < b.len() {
            if b[i] == b'[' {
                let close = text[i..].find(']').ok_or_else(|| bad("a bracket is not closed"))? + i;
                let n: usize = text[i + 1..close].parse().map_err(|_| bad("an index must be a whole number"))?;
                keys.push(Key::Index(n));
                i = close + 1;
                expect_name = false;
            } else if b[i] == b'.' {
                if expect_name {
                    return Err(bad("a field name is missing"));
                }
                i += 1;
                expect_name = true;
            } else {
                if !expect_name {
                    return Err(bad("a dot or bracket must follow an index"));
                }
                let end = text[i..].find(['.', '[']).map(|k| k + i).unwrap_or(text.len());
                let name = &text[i..end];
                if !name.bytes().all(|c| c.is_ascii_alphanumeric() || c == b'_') {
                    return Err(bad("field names hold letters, digits and underscores"));
                }
                keys.push(Key::Field(name.to_string()));
                i = end;
                expect_name = false;
            }
        }
        if expect_name {
            return Err(bad("a field name is missing"));
        }
        Ok(FieldPath { text: text.to_string(), keys })
    }

    fn find<'a>(&self, v: &'a Value) -> Option<&'a Value> {
        let mut v = v;
        for k in &self.keys {
            v = match k {
                Key::Field(name) => v.as_object()?.get(name)?,
                Key::Index(i) => v.as_array()?.get(*i)?,
            };
        }
        Some(v)
    }

    fn find_mut<'a>(&self, v: &'a mut Value) -> Option<&'a mut Value> {
        let mut v = v;
        for k in &self.keys {
            v = match k {
                Key::Field(name) => v.as_object_mut()?.get_mut(name)?,
                Key::Index(i) => v.as_array_mut()?.get_mut(*i)?,
            };
        }
        Some(v)
    }

    /// The number at this path in a design's JSON form, and its kind; `at` names where the
    /// path was given, `whose` the design ("designs[1]") for the error.
    pub fn read(&self, design: &Value, at: &str, whose: &str) -> Result<(f64, NumberKind), InputError> {
        match self.find(design) {
            None => Err(InputError::single(at, format!("\"{}\"", self.text), format!("must name a numeric field of the design; {whose} has no such field"))),
            Some(Value::Number(n)) => {
                let kind = if n.is_f64() { NumberKind::Real } else { NumberKind::Whole };
                Ok((n.as_f64().unwrap_or(0.0), kind))
            }
            Some(other) => Err(InputError::single(
                at,
                format!("\"{}\"", self.text),
                format!("must name a numeric field of the design; in {whose} it holds {}", describe(other)),
            )),
        }
    }

    /// Sets the number at this path (already known to exist) to `x`; `Err` says why not.
    pub fn write(&self, design: &mut Value, x: f64, kind: NumberKind) -> Result<(), String> {
        let number = match kind {
            NumberKind::Real => Number::from_f64(x).ok_or_else(|| format!("{}: {}; must be a finite number", self.text, show(x)))?,
            NumberKind::Whole => {
                let r = libm::round(x);
                if !r.is_finite() || r.abs() > 9e15 {
                    return Err(format!("{}: {}; must be a whole number of at most 9e15", self.text, show(x)));
                }
                if r >= 0.0 { Number::from(r as u64) } else { Number::from(r as i64) }
            }
        };
        match self.find_mut(design) {
            Some(slot) => {
                *slot = Value::Number(number);
                Ok(())
            }
            None => Err(format!("{}: the design has no such field", self.text)),
        }
    }
}

/// A design with some fields set: `changes` are (path, kind, value), written into `base`
/// (the JSON form of a design of this schema version) and read back as a design; `base` is
/// restored afterwards, so no copy of the document is made. `Err` holds the reason in a
/// sentence when the changed document does not fit the schema. The design is not validated
/// here: [`crate::evaluate`] validates it and names any field out of range.
pub fn with_values(base: &mut Value, changes: &[(&FieldPath, NumberKind, f64)]) -> Result<Design, String> {
    let mut saved = Vec::with_capacity(changes.len());
    let mut outcome = Ok(());
    for &(p, kind, x) in changes {
        match p.find(base) {
            Some(old) => saved.push((p, old.clone())),
            None => {
                outcome = Err(format!("{}: the design has no such field", p.text));
                break;
            }
        }
        if let Err(e) = p.write(base, x, kind) {
            outcome = Err(e);
            break;
        }
    }
    let result = outcome.and_then(|()| {
        Design::deserialize(&*base).map_err(|e| {
            let list: Vec<String> = changes.iter().map(|(p, _, x)| format!("{} = {}", p.text, show(*x))).collect();
            format!("{}; the design does not fit its schema: {e}", list.join(", "))
        })
    });
    for (p, old) in saved.into_iter().rev() {
        if let Some(slot) = p.find_mut(base) {
            *slot = old;
        }
    }
    result
}

fn describe(v: &Value) -> String {
    match v {
        Value::Null => "null (give it a number in the design first)".into(),
        Value::Bool(_) => "true or false".into(),
        Value::String(s) => format!("the text \"{}\"", clip(s)),
        Value::Array(_) => "a list (add an index such as [0])".into(),
        Value::Object(_) => "a group of fields (add a field name)".into(),
        Value::Number(_) => "a number".into(),
    }
}

fn clip(s: &str) -> String {
    let mut out: String = s.chars().take(60).collect();
    if s.chars().count() > 60 {
        out.push('…');
    }
    out
}
