//! Walks any serialisable result and lists every floating-point number that is not finite,
//! with its path (`curve.total[3]`).
//!
//! JSON cannot hold NaN or infinity (serde_json writes them as `null`, and the page would
//! receive a JavaScript NaN through serde-wasm-bindgen), so the walk happens on the
//! result's own serialisation, before any JSON is made. The engine's results pass through
//! [`require_finite`] last, so no NaN or infinity is ever returned as a number; the fuzz
//! passes (tools/fuzz) count the inputs that reach it.

use crate::error::InputError;
use serde::ser::{self, Serialize};
use std::fmt;

/// `Ok` when every number of `value` is finite; otherwise an error naming the first result
/// field that is not, so the caller shows an error instead of a NaN.
pub fn require_finite<T: Serialize + ?Sized>(value: &T, what: &str) -> Result<(), InputError> {
    let bad = non_finite(value);
    match bad.first() {
        None => Ok(()),
        Some(first) => {
            // Each entry reads `path = value`: the path names the field, the value leads.
            let (at, x) = first.split_once(" = ").unwrap_or((first.as_str(), "not finite"));
            let more = if bad.len() > 1 { format!(", {} numbers in all", bad.len()) } else { String::new() };
            Err(out_of_range(format!("{what}.{}", crate::error::clip(at, crate::error::MAX_QUOTED_CHARS)), format!("{x} (out of the double-precision range{more})")))
        }
    }
}

/// The error of a result number beyond double precision, at `path`; `value` says which
/// and how many numbers. Also for an early refusal, before the rest of a result is made.
pub fn out_of_range(path: String, value: String) -> InputError {
    InputError::single(path, value, "the inputs combine beyond the range this model computes in; bring the most extreme values (noise levels, cut-off, times) nearer to typical ones")
}

/// The paths of all non-finite numbers in `value` (empty when everything is finite).
pub fn non_finite<T: Serialize + ?Sized>(value: &T) -> Vec<String> {
    let mut w = Walker { path: Vec::new(), bad: Vec::new() };
    // The walker itself never fails; an error can only come from a type's own Serialize.
    if let Err(e) = value.serialize(&mut w) {
        w.bad.push(format!("(serialisation failed: {e})"));
    }
    w.bad
}

struct Walker {
    path: Vec<String>,
    bad: Vec<String>,
}

impl Walker {
    fn here(&self) -> String {
        let mut s = String::new();
        for p in &self.path {
            if p.starts_with('[') || s.is_empty() {
                s.push_str(p);
            } else {
                s.push('.');
                s.push_str(p);
            }
        }
        if s.is_empty() { "(root)".into() } else { s }
    }
    fn float(&mut self, x: f64) {
        if !x.is_finite() {
            let at = self.here();
            self.bad.push(format!("{at} = {x}"));
        }
    }
    fn nested<T: Serialize + ?Sized>(&mut self, key: String, v: &T) -> Result<(), Error> {
        self.path.push(key);
        let r = v.serialize(&mut *self);
        self.path.pop();
        r
    }
}

#[derive(Debug)]
pub struct Error(String);

impl fmt::Display for Error {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.0)
    }
}
impl std::error::Error for Error {}
impl ser::Error for Error {
    fn custom<T: fmt::Display>(msg: T) -> Self {
        Error(msg.to_string())
    }
}

/// Sequence, tuple, map and struct state: the walker and the index of the next element.
pub struct Compound<'a> {
    w: &'a mut Walker,
    index: usize,
    key: Option<String>,
}

impl<'a> ser::Serializer for &'a mut Walker {
    type Ok = ();
    type Error = Error;
    type SerializeSeq = Compound<'a>;
    type SerializeTuple = Compound<'a>;
    type SerializeTupleStruct = Compound<'a>;
    type SerializeTupleVariant = Compound<'a>;
    type SerializeMap = Compound<'a>;
    type SerializeStruct = Compound<'a>;
    type SerializeStructVariant = Compound<'a>;

    fn serialize_bool(self, _: bool) -> Result<(), Error> { Ok(()) }
    fn serialize_i8(self, _: i8) -> Result<(), Error> { Ok(()) }
    fn serialize_i16(self, _: i16) -> Result<(), Error> { Ok(()) }
    fn serialize_i32(self, _: i32) -> Result<(), Error> { Ok(()) }
    fn serialize_i64(self, _: i64) -> Result<(), Error> { Ok(()) }
    fn serialize_u8(self, _: u8) -> Result<(), Error> { Ok(()) }
    fn serialize_u16(self, _: u16) -> Result<(), Error> { Ok(()) }
    fn serialize_u32(self, _: u32) -> Result<(), Error> { Ok(()) }
    fn serialize_u64(self, _: u64) -> Result<(), Error> { Ok(()) }
    fn serialize_f32(self, v: f32) -> Result<(), Error> {
        self.float(v as f64);
        Ok(())
    }
    fn serialize_f64(self, v: f64) -> Result<(), Error> {
        self.float(v);
        Ok(())
    }
    fn serialize_char(self, _: char) -> Result<(), Error> { Ok(()) }
    fn serialize_str(self, _: &str) -> Result<(), Error> { Ok(()) }
    fn serialize_bytes(self, _: &[u8]) -> Result<(), Error> { Ok(()) }
    fn serialize_none(self) -> Result<(), Error> { Ok(()) }
    fn serialize_some<T: Serialize + ?Sized>(self, v: &T) -> Result<(), Error> { v.serialize(self) }
    fn serialize_unit(self) -> Result<(), Error> { Ok(()) }
    fn serialize_unit_struct(self, _: &'static str) -> Result<(), Error> { Ok(()) }
    fn serialize_unit_variant(self, _: &'static str, _: u32, _: &'static str) -> Result<(), Error> { Ok(()) }
    fn serialize_newtype_struct<T: Serialize + ?Sized>(self, _: &'static str, v: &T) -> Result<(), Error> { v.serialize(self) }
    fn serialize_newtype_variant<T: Serialize + ?Sized>(self, _: &'static str, _: u32, variant: &'static str, v: &T) -> Result<(), Error> {
        self.nested(variant.to_string(), v)
    }
    fn serialize_seq(self, _: Option<usize>) -> Result<Compound<'a>, Error> { Ok(Compound { w: self, index: 0, key: None }) }
    fn serialize_tuple(self, _: usize) -> Result<Compound<'a>, Error> { Ok(Compound { w: self, index: 0, key: None }) }
    fn serialize_tuple_struct(self, _: &'static str, _: usize) -> Result<Compound<'a>, Error> { Ok(Compound { w: self, index: 0, key: None }) }
    fn serialize_tuple_variant(self, _: &'static str, _: u32, variant: &'static str, _: usize) -> Result<Compound<'a>, Error> {
        self.path.push(variant.to_string());
        Ok(Compound { w: self, index: 0, key: Some(String::new()) })
    }
    fn serialize_map(self, _: Option<usize>) -> Result<Compound<'a>, Error> { Ok(Compound { w: self, index: 0, key: None }) }
    fn serialize_struct(self, _: &'static str, _: usize) -> Result<Compound<'a>, Error> { Ok(Compound { w: self, index: 0, key: None }) }
    fn serialize_struct_variant(self, _: &'static str, _: u32, variant: &'static str, _: usize) -> Result<Compound<'a>, Error> {
        self.path.push(variant.to_string());
        Ok(Compound { w: self, index: 0, key: Some(String::new()) })
    }
}

impl Compound<'_> {
    fn element<T: Serialize + ?Sized>(&mut self, v: &T) -> Result<(), Error> {
        let i = self.index;
        self.index += 1;
        self.w.nested(format!("[{i}]"), v)
    }
    /// Variants pushed their name on the path; it comes off when they end.
    fn end_variant(self) -> Result<(), Error> {
        if self.key.is_some() {
            self.w.path.pop();
        }
        Ok(())
    }
}

impl ser::SerializeSeq for Compound<'_> {
    type Ok = ();
    type Error = Error;
    fn serialize_element<T: Serialize + ?Sized>(&mut self, v: &T) -> Result<(), Error> { self.element(v) }
    fn end(self) -> Result<(), Error> { self.end_variant() }
}
impl ser::SerializeTuple for Compound<'_> {
    type Ok = ();
    type Error = Error;
    fn serialize_element<T: Serialize + ?Sized>(&mut self, v: &T) -> Result<(), Error> { self.element(v) }
    fn end(self) -> Result<(), Error> { self.end_variant() }
}
impl ser::SerializeTupleStruct for Compound<'_> {
    type Ok = ();
    type Error = Error;
    fn serialize_field<T: Serialize + ?Sized>(&mut self, v: &T) -> Result<(), Error> { self.element(v) }
    fn end(self) -> Result<(), Error> { self.end_variant() }
}
impl ser::SerializeTupleVariant for Compound<'_> {
    type Ok = ();
    type Error = Error;
    fn serialize_field<T: Serialize + ?Sized>(&mut self, v: &T) -> Result<(), Error> { self.element(v) }
    fn end(self) -> Result<(), Error> { self.end_variant() }
}
impl ser::SerializeMap for Compound<'_> {
    type Ok = ();
    type Error = Error;
    fn serialize_key<T: Serialize + ?Sized>(&mut self, k: &T) -> Result<(), Error> {
        // Keys are text in every result of the engine; a key's own numbers are checked too.
        let name = serde_json::to_value(k).ok().and_then(|v| v.as_str().map(str::to_string)).unwrap_or_else(|| format!("[key {}]", self.index));
        self.index += 1;
        self.w.nested(format!("{name}(key)"), k)?;
        self.key = Some(name);
        Ok(())
    }
    fn serialize_value<T: Serialize + ?Sized>(&mut self, v: &T) -> Result<(), Error> {
        let k = self.key.take().unwrap_or_default();
        self.w.nested(k, v)
    }
    fn end(self) -> Result<(), Error> { Ok(()) }
}
impl ser::SerializeStruct for Compound<'_> {
    type Ok = ();
    type Error = Error;
    fn serialize_field<T: Serialize + ?Sized>(&mut self, key: &'static str, v: &T) -> Result<(), Error> { self.w.nested(key.to_string(), v) }
    fn end(self) -> Result<(), Error> { self.end_variant() }
}
impl ser::SerializeStructVariant for Compound<'_> {
    type Ok = ();
    type Error = Error;
    fn serialize_field<T: Serialize + ?Sized>(&mut self, key: &'static str, v: &T) -> Result<(), Error> { self.w.nested(key.to_string(), v) }
    fn end(self) -> Result<(), Error> { self.end_variant() }
}

#[cfg(test)]
mod tests {
    use super::{non_finite, require_finite};
    use serde::Serialize;
    use std::collections::BTreeMap;

    #[derive(Serialize)]
    struct Inner {
        x: Vec<f64>,
        m: BTreeMap<String, (f64, Option<f64>)>,
    }
    #[derive(Serialize)]
    enum Kind {
        A { v: f64 },
    }
    #[derive(Serialize)]
    struct Outer {
        ok: f64,
        inner: Inner,
        kind: Kind,
    }

    #[test]
    fn finds_every_non_finite_number_with_its_path() {
        let mut m = BTreeMap::new();
        m.insert("k".to_string(), (1.0, Some(f64::NEG_INFINITY)));
        let o = Outer { ok: 1.0, inner: Inner { x: vec![0.0, f64::NAN], m }, kind: Kind::A { v: f64::INFINITY } };
        assert_eq!(non_finite(&o), vec!["inner.x[1] = NaN", "inner.m.k[1] = -inf", "kind.A.v = inf"]);
    }

    /// The refusal names the first field alone as its path, and its value with the count.
    #[test]
    fn refusal_names_the_field_and_its_value() {
        let o = Outer { ok: 1.0, inner: Inner { x: vec![0.0, f64::NAN], m: BTreeMap::new() }, kind: Kind::A { v: f64::INFINITY } };
        let e = require_finite(&o, "result").unwrap_err();
        assert_eq!(e.problems.len(), 1);
        assert_eq!(e.problems[0].path, "result.inner.x[1]");
        assert_eq!(e.problems[0].value, "NaN (out of the double-precision range, 2 numbers in all)");
        assert!(e.problems[0].allowed.contains("nearer to typical ones"));
    }

    #[test]
    fn finite_results_pass() {
        let mut m = BTreeMap::new();
        m.insert("k".to_string(), (1.0, None));
        let o = Outer { ok: f64::MAX, inner: Inner { x: vec![-0.0, 5e-324], m }, kind: Kind::A { v: 1.0 } };
        assert!(non_finite(&o).is_empty());
    }
}
