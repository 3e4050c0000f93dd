//! Input generators: a seeded random source, byte-level mutations of seed files and
//! structural mutations of JSON documents.
//!
//! Written here rather than taken from a fuzzing crate: the machine has only stable Rust
//! (cargo-fuzz and libFuzzer need nightly), the mutations needed are few and specific
//! (JSON tokens and field names, extreme numbers, CSV lines), and a fixed seed must replay
//! the same inputs on every machine, which a small generator of our own guarantees.

use clockwright_core::study::SplitMix64;
use serde_json::{Map, Number, Value};

/// The core's seeded SplitMix64 (the same sequence for the same seed everywhere) with the
/// draws the generators need.
#[derive(Clone)]
pub struct Rng(SplitMix64);

impl Rng {
    pub fn new(seed: u64) -> Rng {
        Rng(SplitMix64(seed ^ 0x9E37_79B9_7F4A_7C15))
    }
    pub fn next_u64(&mut self) -> u64 {
        self.0.next_u64()
    }
    /// A whole number in `0..n` (n > 0).
    pub fn below(&mut self, n: usize) -> usize {
        (self.next_u64() % n.max(1) as u64) as usize
    }
    /// Uniform in [0, 1).
    pub fn unit(&mut self) -> f64 {
        (self.next_u64() >> 11) as f64 / (1u64 << 53) as f64
    }
    pub fn chance(&mut self, p: f64) -> bool {
        self.unit() < p
    }
    pub fn pick<'a, T>(&mut self, items: &'a [T]) -> &'a T {
        &items[self.below(items.len())]
    }
    /// Log-uniform in [lo, hi] (both > 0).
    pub fn log_uniform(&mut self, lo: f64, hi: f64) -> f64 {
        let x = (lo.ln() + self.unit() * (hi.ln() - lo.ln())).exp();
        x.clamp(lo, hi)
    }
}

/// Numbers at and beyond every edge a parser or a formula can meet.
pub const EXTREME_NUMBERS: &[&str] = &[
    "0", "-0", "-0.0", "1", "-1", "0.5", "2", "1e-9", "1e-300", "5e-324", "2.2250738585072014e-308", "1e308",
    "1.7976931348623157e308", "-1.7976931348623157e308", "1e309", "-1e309", "1e999", "NaN", "nan", "Infinity", "-Infinity",
    "inf", "-inf", "4294967295", "4294967296", "-4294967296", "9007199254740993", "18446744073709551615",
    "18446744073709551616", "99999999999999999999999999999", "1e17", "1e12", "1e9", "1e5", "100000000", "100000001",
    "99", "100", "64", "65", "16", "17", "20000", "20001", "0x10", "1_000", "+1", ".5", "5.", "1e", "--1", "1e+400",
    "3.2e9", "1e7", "1e-6", "1e-3", "0.49", "0.5000001", "50", "50.0000001", "3600", "-3600.5",
];

/// JSON fragments and the schema's field names, for insertion into documents.
pub const JSON_TOKENS: &[&str] = &[
    "{", "}", "[", "]", ",", ":", "\"", "null", "true", "false", "{}", "[]", "\"\"", "\\u0000", "\\ud800", "\\\"",
    "\"schema_version\":", "\"name\":", "\"transition\":", "\"frequency_hz\":", "\"lifetime_s\":", "\"species\":",
    "\"k_alpha\":", "\"atoms\":", "\"count\":", "\"entanglement\":", "\"kind\":", "\"gain_db\":", "\"sequence\":",
    "\"segments\":", "\"duration_s\":", "\"area_pi\":", "\"phase_deg\":", "\"detuning_offset_hz\":", "\"label\":",
    "\"detection\":", "\"rounds\":", "\"misread_ground\":", "\"misread_excited\":", "\"laser\":", "\"noise\":",
    "\"table\":", "\"unit\":", "\"points\":", "\"high_cutoff_hz\":", "\"drift_per_s\":", "\"lock\":",
    "\"attack_time_s\":", "\"operating_point\":", "\"sigma_y_1s\":", "\"sigma_y\":", "\"alpha\":", "\"coefficient\":",
    "\"at_hz\":", "\"value\":", "\"pulse\"", "\"free\"", "\"dead\"", "\"ghz\"", "\"squeezed\"", "\"power_law\"",
    "\"power_law_at\"", "\"white_frequency\"", "\"flicker_floor\"", "\"random_walk\"", "\"l_dbc\"", "\"s_nu\"",
    "\"s_y\"", "\"half_maximum\"", "\"comparison\":", "\"link\":", "\"campaign\":", "\"sessions\":",
    "\"shared_laser\"", "\"correlation\"", "\"dark_time_s\":", "\"uptime\":", "\"x\":", "\"y\":", "\"path\":",
    "\"from\":", "\"to\":", "\"log\"", "\"output\":", "\"levels\":", "\"uncertain\":", "\"samples\":",
    "\"quantiles\":", "\"<script>alert(1)</script>\"", "\"<img src=x onerror=alert(1)>\"", "\"\u{202e}\u{feff}\"",
];

/// Text fragments for CSV files.
pub const CSV_TOKENS: &[&str] = &[
    ",", ";", "\t", "\n", "\r\n", "\r", "#", "# tau0_s: ", "# nominal_hz: ", "# tau0_s: 1e-300", "# tau0_s: 1e17",
    "f_hz,s_y", "f_hz,s_nu", "f_hz,l_dbc", "f,S_Y", "frequency_hz;l_dbc", "y", "t_s,y", "t_mjd,y", "t_s,x_ns",
    "x_ps", "df_hz", "t_s,df_hz", "nan", "NaN", "", " ", "\u{feff}", "\"", "<script>alert(1)</script>", "=cmd|' /C calc'!A0",
];

/// Strings that hostile documents put in names and labels.
pub const HOSTILE_STRINGS: &[&str] = &[
    "<script>alert(1)</script>",
    "<img src=x onerror=alert(1)>",
    "\"><svg onload=alert(1)>",
    "javascript:alert(1)",
    "\u{0000}\u{202e}\u{feff}\u{fffd}",
    "{{constructor.constructor('alert(1)')()}}",
    "__proto__",
    "&lt;b&gt;&amp;",
];

/// One to four byte-level edits of `input`: bit flips, inserted or deleted bytes and runs,
/// duplicated runs, splices from another seed, dictionary tokens, extreme numbers in place
/// of a number, deep nesting and bytes that are not UTF-8.
pub fn mutate_bytes(rng: &mut Rng, input: &[u8], others: &[Vec<u8>], tokens: &[&str]) -> Vec<u8> {
    let mut b = input.to_vec();
    let edits = 1 + rng.below(4);
    for _ in 0..edits {
        let n = b.len();
        match rng.below(11) {
            0 if n > 0 => {
                let i = rng.below(n);
                b[i] ^= 1 << rng.below(8);
            }
            1 => {
                let i = rng.below(n + 1);
                b.insert(i, rng.next_u64() as u8);
            }
            2 if n > 0 => {
                let i = rng.below(n);
                let len = (1 + rng.below(32)).min(n - i);
                b.drain(i..i + len);
            }
            3 if n > 0 => {
                // Duplicate a run, sometimes many times (long lines, many rows).
                let i = rng.below(n);
                let len = (1 + rng.below(64)).min(n - i);
                let run: Vec<u8> = b[i..i + len].to_vec();
                let times = if rng.chance(0.1) { 1 + rng.below(2000) } else { 1 + rng.below(4) };
                let at = rng.below(b.len() + 1);
                let mut ins = Vec::with_capacity(run.len() * times);
                for _ in 0..times {
                    ins.extend_from_slice(&run);
                }
                b.splice(at..at, ins);
            }
            4 if !others.is_empty() => {
                // Splice: a head of this input and a tail of another seed.
                let o = rng.pick(others);
                let i = rng.below(n + 1);
                let j = rng.below(o.len() + 1);
                b.truncate(i);
                b.extend_from_slice(&o[j..]);
            }
            5 | 6 => {
                let t = rng.pick(tokens).as_bytes();
                let i = rng.below(n + 1);
                b.splice(i..i, t.iter().copied());
            }
            7 => replace_number(rng, &mut b),
            8 => {
                // Deep nesting.
                let depth = 1 + rng.below(5000);
                let (open, close) = if rng.chance(0.5) { ("[", "]") } else { ("{\"a\":", "}") };
                let i = rng.below(n + 1);
                let mut ins = open.repeat(depth).into_bytes();
                if rng.chance(0.5) {
                    ins.extend_from_slice(close.repeat(depth).as_bytes());
                }
                b.splice(i..i, ins);
            }
            9 => {
                // Bytes that are not UTF-8 (a lone continuation byte, an overlong form,
                // a surrogate encoded in UTF-8, 0xFF) or a byte-order mark.
                let pieces: &[&[u8]] = &[b"\x80", b"\xc0\xaf", b"\xed\xa0\x80", b"\xff\xfe", b"\xef\xbb\xbf", b"\x00", b"\xc3"];
                let p = rng.pick(pieces);
                let i = if rng.chance(0.3) { 0 } else { rng.below(n + 1) };
                b.splice(i..i, p.iter().copied());
            }
            _ if n > 0 => {
                // Truncate.
                b.truncate(rng.below(n));
            }
            _ => b.push(b' '),
        }
    }
    b
}

/// Replaces one run of number characters in `b` by an extreme number.
fn replace_number(rng: &mut Rng, b: &mut Vec<u8>) {
    let starts: Vec<usize> = (0..b.len()).filter(|&i| b[i].is_ascii_digit() && (i == 0 || !is_num_byte(b[i - 1]))).collect();
    if starts.is_empty() {
        return;
    }
    let s = *rng.pick(&starts);
    let mut e = s;
    while e < b.len() && is_num_byte(b[e]) {
        e += 1;
    }
    let s = if s > 0 && b[s - 1] == b'-' { s - 1 } else { s };
    let x = rng.pick(EXTREME_NUMBERS).as_bytes();
    b.splice(s..e, x.iter().copied());
}

fn is_num_byte(c: u8) -> bool {
    c.is_ascii_digit() || matches!(c, b'.' | b'e' | b'E' | b'+' | b'-')
}

/// One to three structural edits of a JSON document: a node replaced by an extreme number,
/// a scaled number, another type, a hostile string, a huge array or a deep nest; an object
/// key removed or a schema field added; array elements duplicated or removed.
pub fn mutate_json(rng: &mut Rng, doc: &Value, others: &[Value]) -> Value {
    let mut v = doc.clone();
    let edits = 1 + rng.below(3);
    for _ in 0..edits {
        let mut paths = Vec::new();
        collect_paths(&v, &mut Vec::new(), &mut paths);
        let path = rng.pick(&paths).clone();
        let node = node_at(&mut v, &path);
        match rng.below(10) {
            0 | 1 => *node = extreme_number(rng),
            2 => {
                if let Some(x) = node.as_f64() {
                    let k = 10f64.powi(rng.below(80) as i32 - 40) * if rng.chance(0.2) { -1.0 } else { 1.0 };
                    *node = num(x * k);
                } else {
                    *node = extreme_number(rng);
                }
            }
            3 => {
                *node = match rng.below(6) {
                    0 => Value::Null,
                    1 => Value::Bool(rng.chance(0.5)),
                    2 => Value::String(rng.pick(HOSTILE_STRINGS).to_string()),
                    3 => Value::Array(vec![]),
                    4 => Value::Object(Map::new()),
                    _ => Value::String(rng.pick(EXTREME_NUMBERS).to_string()),
                }
            }
            4 => {
                if let Value::Object(m) = node {
                    if !m.is_empty() {
                        let k = m.keys().nth(rng.below(m.len())).cloned().unwrap_or_default();
                        m.remove(&k);
                    }
                } else if let Value::Array(a) = node {
                    if !a.is_empty() {
                        let i = rng.below(a.len());
                        a.remove(i);
                    }
                }
            }
            5 => {
                if let Value::Array(a) = node {
                    if !a.is_empty() {
                        let i = rng.below(a.len());
                        let e = a[i].clone();
                        // Many copies of small elements (long tables, many segments), at
                        // most about 4 MB in all.
                        let size = serde_json::to_string(&e).map(|t| t.len()).unwrap_or(1).max(1);
                        let most = (4_000_000 / size).clamp(1, 30_000);
                        let times = if rng.chance(0.2) { 1 + rng.below(most) } else { 1 + rng.below(8) };
                        for _ in 0..times {
                            a.insert(i, e.clone());
                        }
                    }
                } else if let Value::Object(m) = node {
                    let name = rng.pick(JSON_TOKENS).trim_end_matches(':').trim_matches('"').to_string();
                    m.insert(name, extreme_number(rng));
                }
            }
            6 => {
                if let Value::String(s) = node {
                    let h = rng.pick(HOSTILE_STRINGS);
                    *s = if rng.chance(0.1) { h.repeat(1 + rng.below(20_000) / h.len().max(1)) } else { format!("{s}{h}") };
                } else {
                    *node = Value::String(rng.pick(HOSTILE_STRINGS).to_string());
                }
            }
            7 => {
                let depth = 1 + rng.below(300);
                let mut x = Value::Null;
                for _ in 0..depth {
                    x = if rng.chance(0.5) { Value::Array(vec![x]) } else { Value::Object(Map::from_iter([("a".to_string(), x)])) };
                }
                *node = x;
            }
            8 if !others.is_empty() => {
                // Graft a node of another seed.
                let o = rng.pick(others);
                let mut op = Vec::new();
                collect_paths(o, &mut Vec::new(), &mut op);
                let p = rng.pick(&op).clone();
                let mut oc = o.clone();
                *node = node_at(&mut oc, &p).clone();
            }
            _ => {
                if let Some(x) = node.as_f64() {
                    *node = num(-x);
                } else if let Some(x) = node.as_u64() {
                    *node = Value::Number(Number::from(x.wrapping_add(rng.below(3) as u64).wrapping_sub(1)));
                }
            }
        }
    }
    v
}

fn num(x: f64) -> Value {
    Number::from_f64(x).map(Value::Number).unwrap_or_else(|| Value::String(x.to_string()))
}

fn extreme_number(rng: &mut Rng) -> Value {
    let s = rng.pick(EXTREME_NUMBERS);
    serde_json::from_str::<Value>(s).ok().filter(|v| v.is_number()).unwrap_or_else(|| {
        // Not JSON numbers (NaN, 1e999, 0x10, ...): the nearest JSON value, or the text.
        let x: f64 = s.parse().unwrap_or(f64::NAN);
        if x.is_finite() { num(x) } else if rng.chance(0.5) { num(f64::MAX.copysign(x)) } else { Value::String(s.to_string()) }
    })
}

#[derive(Clone)]
enum Step {
    Key(String),
    Index(usize),
}

fn collect_paths(v: &Value, here: &mut Vec<Step>, out: &mut Vec<Vec<Step>>) {
    out.push(here.clone());
    match v {
        Value::Object(m) => {
            for (k, x) in m {
                here.push(Step::Key(k.clone()));
                collect_paths(x, here, out);
                here.pop();
            }
        }
        Value::Array(a) => {
            // Long arrays (tables): a few elements are enough.
            let n = a.len();
            for i in (0..n).filter(|&i| n <= 8 || i < 4 || i + 4 >= n) {
                here.push(Step::Index(i));
                collect_paths(&a[i], here, out);
                here.pop();
            }
        }
        _ => {}
    }
}

fn node_at<'a>(v: &'a mut Value, path: &[Step]) -> &'a mut Value {
    let mut cur = v;
    for s in path {
        cur = match (s, cur) {
            (Step::Key(k), Value::Object(m)) => m.get_mut(k).expect("path from collect_paths"),
            (Step::Index(i), Value::Array(a)) => &mut a[*i],
            _ => unreachable!("path from collect_paths"),
        };
    }
    cur
}

/// Line-level edits of a CSV: lines duplicated (many rows), dropped, swapped, cells
/// replaced by extreme numbers or tokens, very long lines; then byte-level edits.
pub fn mutate_csv(rng: &mut Rng, input: &[u8], others: &[Vec<u8>]) -> Vec<u8> {
    if rng.chance(0.4) {
        return mutate_bytes(rng, input, others, CSV_TOKENS);
    }
    let text = String::from_utf8_lossy(input);
    let mut lines: Vec<String> = text.lines().map(str::to_string).collect();
    if lines.is_empty() {
        lines.push(String::new());
    }
    let edits = 1 + rng.below(3);
    for _ in 0..edits {
        let i = rng.below(lines.len());
        match rng.below(7) {
            0 => {
                let l = lines[i].clone();
                let most = (4_000_000 / (l.len() + 1)).clamp(1, 50_000);
                let times = if rng.chance(0.2) { 1 + rng.below(most) } else { 1 + rng.below(5) };
                // One splice, not `times` inserts (each of which moves every later line).
                lines.splice(i..i, std::iter::repeat_n(l, times));
            }
            1 if lines.len() > 1 => {
                lines.remove(i);
            }
            2 => {
                let j = rng.below(lines.len());
                lines.swap(i, j);
            }
            3 | 4 => {
                let cells: Vec<String> = lines[i].split([',', ';', '\t']).map(str::to_string).collect();
                let k = rng.below(cells.len());
                let mut cells = cells;
                cells[k] = if rng.chance(0.8) { rng.pick(EXTREME_NUMBERS).to_string() } else { rng.pick(CSV_TOKENS).to_string() };
                let sep = *rng.pick(&[",", ";", "\t"]);
                lines[i] = cells.join(sep);
            }
            5 => {
                // A very long line (up to about 10 MB).
                let unit = rng.pick(&["1", "1,", "#", "x", "<b>", "\u{fffd}"]).to_string();
                let n = if rng.chance(0.05) { 10_000_000 / unit.len() } else { 1 + rng.below(10_000) };
                lines.insert(i, unit.repeat(n));
            }
            _ => {
                // Numbered rows: a time series continued, with jumps.
                let start: f64 = rng.below(1000) as f64;
                let step = *rng.pick(&[1.0, 0.5, 1e-300, 1e300, 86_400.0, 1e7]);
                let n = 1 + rng.below(2000);
                for k in 0..n {
                    lines.push(format!("{},{}", start + k as f64 * step, rng.unit() - 0.5));
                }
            }
        }
    }
    let eol = if rng.chance(0.1) { "\r\n" } else { "\n" };
    lines.join(eol).into_bytes()
}
