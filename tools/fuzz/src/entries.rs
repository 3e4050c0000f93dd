//! The entry points that take outside input, each as a harness: how an input is made and
//! how it is run through the same code path the page and the headless tools use.

use crate::mutate::{mutate_bytes, mutate_csv, mutate_json, Rng, JSON_TOKENS};
use clockwright_core::design::{caps, DeadLabel, Design, Entanglement, OperatingPointRule, Segment};
use clockwright_core::noise::{NoiseTerm, SpectrumTable, SpectrumUnit, MAX_TABLE_ROWS};
use clockwright_core::{EvalOptions, InputError};
use serde::Serialize;
use serde_json::{json, Value};

/// What one input did.
pub enum Outcome {
    /// Accepted: the result, walked for non-finite numbers by the runner.
    Accepted(Vec<String>),
    /// Refused with an error (checked for being readable by the runner).
    Refused(InputError),
}

/// One harness.
pub struct Entry {
    /// Name on the command line, in reports and in `tests/fuzz/corpus/<name>/`.
    pub name: &'static str,
    /// File extension of its inputs.
    pub ext: &'static str,
    pub make: fn(&mut Rng, &Seeds) -> Vec<u8>,
    /// Largest input made, bytes: for the spectrum CSV the page's own file cap (5 MiB,
    /// `MAX_FILE_BYTES` in www/src/workspace.ts); for JSON documents 1 MiB (a design is a
    /// few kB and the engine refuses one of more than 5 000 values at once; reading a
    /// larger text is the browser's JSON.parse, outside the engine); for measured data
    /// 1 MiB (the page takes 32 MiB, but the time of a large file grows with its rows and
    /// runs in the background worker; the 100 ms target is for files up to 1 MiB, about
    /// 50 000 rows); for study requests 64 KiB (the page makes them from its form, a few
    /// hundred bytes; no file or link carries one, and a 1 MiB request spends its time in
    /// building and freeing the parsed JSON, which in the page is the browser's).
    pub max_bytes: usize,
    pub run: fn(&[u8]) -> Outcome,
}

/// The seed corpus of one entry, as bytes and (for JSON entries) parsed.
pub struct Seeds {
    pub bytes: Vec<Vec<u8>>,
    pub json: Vec<Value>,
}

/// The page's cap on a design, workspace or spectrum file, bytes.
pub const PAGE_FILE_CAP: usize = 5 * 1024 * 1024;

pub const ENTRIES: &[Entry] = &[
    Entry { name: "design", max_bytes: 1 << 20, ext: "json", make: make_design, run: run_design },
    Entry { name: "spectrum_csv", max_bytes: PAGE_FILE_CAP, ext: "csv", make: make_csv, run: run_spectrum_csv },
    Entry { name: "measured_csv", max_bytes: 1 << 20, ext: "csv", make: make_csv, run: run_measured_csv },
    Entry { name: "extreme", max_bytes: 1 << 20, ext: "json", make: make_extreme, run: run_extreme },
    Entry { name: "pair", max_bytes: 1 << 20, ext: "json", make: make_design, run: run_pair },
    Entry { name: "study", max_bytes: 64 << 10, ext: "json", make: make_design, run: run_study },
];

pub fn entry(name: &str) -> Option<&'static Entry> {
    ENTRIES.iter().find(|e| e.name == name)
}

fn walk<T: Serialize>(r: Result<T, InputError>) -> Outcome {
    match r {
        Ok(v) => Outcome::Accepted(crate::finite::non_finite(&v)),
        Err(e) => Outcome::Refused(e),
    }
}

// ----- JSON documents -------------------------------------------------------------------

/// Half structural edits of a parsed seed (deep coverage of the schema), half byte edits
/// (the parser's edges: broken syntax, deep nesting, bytes that are not UTF-8).
fn make_design(rng: &mut Rng, seeds: &Seeds) -> Vec<u8> {
    let i = rng.below(seeds.bytes.len());
    if rng.chance(0.5) && !seeds.json.is_empty() {
        let v = mutate_json(rng, &seeds.json[i % seeds.json.len()], &seeds.json);
        let text = if rng.chance(0.5) { serde_json::to_vec_pretty(&v) } else { serde_json::to_vec(&v) };
        let text = text.unwrap_or_default();
        if rng.chance(0.1) { mutate_bytes(rng, &text, &seeds.bytes, JSON_TOKENS) } else { text }
    } else {
        mutate_bytes(rng, &seeds.bytes[i], &seeds.bytes, JSON_TOKENS)
    }
}

/// Bytes as the page hands them over: the file decoded as UTF-8 with replacement
/// characters (`File.text()`), then `JSON.parse`; here serde_json, which keeps its own
/// nesting limit (128).
fn json_of(bytes: &[u8]) -> Result<Value, InputError> {
    let text = String::from_utf8_lossy(bytes);
    let text = text.strip_prefix('\u{feff}').unwrap_or(&text);
    serde_json::from_str(text).map_err(|e| InputError::single("(document)", "", format!("must be JSON: {e}")))
}

/// A design document: parse, validate, evaluate with the page's options; an accepted
/// design must also write and read back to itself exactly.
pub fn run_design(bytes: &[u8]) -> Outcome {
    let value = match json_of(bytes) {
        Ok(v) => v,
        Err(e) => return Outcome::Refused(e),
    };
    // validate() and evaluate() of the binding both read the document first
    // (Design::from_value); read once here, without copying a large document twice.
    let design = match Design::from_value(value) {
        Ok(d) => d,
        Err(e) => return Outcome::Refused(e),
    };
    // Validation is what the editor shows field by field; evaluation refuses more (a
    // sequence without a usable line, g(t) beyond its piece cap), with its own errors.
    let problems = design.validate().err().map(|e| e.problems).unwrap_or_default();
    let r = clockwright_core::evaluate(&design, &EvalOptions::default());
    if r.is_ok() && !problems.is_empty() {
        return Outcome::Accepted(vec![format!("evaluated although validation lists {} problems", problems.len())]);
    }
    if !problems.is_empty() {
        if let Some(f) = crate::readable(&InputError { problems }) {
            return Outcome::Accepted(vec![format!("validation: {f}")]);
        }
    }
    if r.is_ok() && Design::from_json(&design.to_json()).ok().as_ref() != Some(&design) {
        return Outcome::Accepted(vec!["the design does not read back to itself from its JSON".into()]);
    }
    walk(r)
}

/// A pair document: parse, validate, evaluate the ratio (the page's immediate call).
pub fn run_pair(bytes: &[u8]) -> Outcome {
    match json_of(bytes) {
        Ok(v) => walk(crate::page::evaluate_pair_value(v, Value::Null)),
        Err(e) => Outcome::Refused(e),
    }
}

/// Study requests, as `{"study": "sweep"|"bands"|"optimum", "designs": [indices of the
/// demo designs], "request": {...}}`. The preparation is run, then at most two points
/// or samples (a study's whole cost is its cap on points times one evaluation, documented
/// in docs/caps.md); studies small enough are run to the end and their result walked.
pub fn run_study(bytes: &[u8]) -> Outcome {
    let mut v = match json_of(bytes) {
        Ok(v) => v,
        Err(e) => return Outcome::Refused(e),
    };
    let demos = clockwright_core::demo::designs();
    let designs: Vec<Value> = v
        .get("designs")
        .and_then(Value::as_array)
        // The page passes the designs of its workspace (at most 16); one more than the
        // cap is kept so the cap's own error is exercised.
        .map(|a| a.iter().take(clockwright_core::study::caps::MAX_DESIGNS + 1).filter_map(|i| i.as_u64()).map(|i| serde_json::to_value(&demos[i as usize % demos.len()]).unwrap_or(Value::Null)).collect())
        .unwrap_or_default();
    // Taken, not copied: the binding receives the request as a value of its own.
    let request = v.get_mut("request").map(Value::take).unwrap_or(Value::Null);
    const STEP: usize = 2;
    match v.get("study").and_then(Value::as_str).unwrap_or("") {
        "optimum" => {
            // The detection-round scan multiplies the search by max_rounds (up to 99: seconds
            // in the page's worker, with progress); one input here scans at most 2 rounds,
            // so it times one search.
            let mut request = request;
            if let Some(r) = request.get_mut("max_rounds").filter(|r| r.as_u64().is_some_and(|n| n > 2)) {
                *r = Value::from(2);
            }
            let d = designs.into_iter().next().unwrap_or(Value::Null);
            walk(crate::page::optimum_value(d, request))
        }
        "bands" => {
            let d = designs.into_iter().next().unwrap_or(Value::Null);
            match crate::page::band_run_value(d, request) {
                Err(e) => Outcome::Refused(e),
                Ok(mut run) => {
                    let p = run.advance(STEP);
                    walk_steps(&p, run.is_finished(), || run.result())
                }
            }
        }
        _ => match crate::page::grid_run_value(Value::Array(designs), request) {
            Err(e) => Outcome::Refused(e),
            Ok(mut run) => {
                let p = run.advance(STEP);
                walk_steps(&p, run.is_finished(), || run.result())
            }
        },
    }
}

/// A study run's first steps `progress`, and its result when the run `finished` with them.
fn walk_steps<P: Serialize, R: Serialize>(progress: &P, finished: bool, result: impl FnOnce() -> Result<R, InputError>) -> Outcome {
    let mut bad = crate::finite::non_finite(progress);
    if finished {
        match result() {
            Ok(r) => bad.extend(crate::finite::non_finite(&r)),
            Err(e) => return Outcome::Refused(e),
        }
    }
    Outcome::Accepted(bad)
}

// ----- CSV files --------------------------------------------------------------------------

fn make_csv(rng: &mut Rng, seeds: &Seeds) -> Vec<u8> {
    let i = rng.below(seeds.bytes.len());
    mutate_csv(rng, &seeds.bytes[i], &seeds.bytes)
}

/// A spectrum CSV as the editor imports it; an accepted table goes into the first demo
/// design in place of its laser noise and is evaluated (what the page does next).
pub fn run_spectrum_csv(bytes: &[u8]) -> Outcome {
    let text = String::from_utf8_lossy(bytes);
    let table = match crate::page::parse_spectrum_csv(&text) {
        Ok(t) => t,
        Err(e) => return Outcome::Refused(e),
    };
    let mut bad = crate::finite::non_finite(&table);
    let mut d = clockwright_core::demo::designs().remove(0);
    d.laser.table = Some(table);
    match clockwright_core::evaluate(&d, &EvalOptions::default()) {
        Ok(r) => bad.extend(crate::finite::non_finite(&r)),
        // A table may be valid as a file and still not fit the design (its cut-off).
        Err(e) => return Outcome::Refused(e),
    }
    Outcome::Accepted(bad)
}

/// A measured-data CSV as the page's worker imports it (default estimator options).
pub fn run_measured_csv(bytes: &[u8]) -> Outcome {
    let text = String::from_utf8_lossy(bytes);
    walk(crate::page::import_measured_value(&text, Value::Null))
}

// ----- Extreme but valid designs ----------------------------------------------------------

/// A value at the lower edge, at the upper edge, or log-uniform between (30/30/40 %).
fn edge(rng: &mut Rng, lo: f64, hi: f64) -> f64 {
    match rng.below(10) {
        0..=2 => lo,
        3..=5 => hi,
        _ => rng.log_uniform(lo, hi),
    }
}

/// A signed value: zero, either edge, or log-uniform in magnitude.
fn signed(rng: &mut Rng, hi: f64) -> f64 {
    let s = if rng.chance(0.5) { -1.0 } else { 1.0 };
    match rng.below(10) {
        0..=1 => 0.0,
        2..=5 => s * hi,
        _ => s * rng.log_uniform(1e-12 * hi, hi),
    }
}

/// Smallest positive value a field "above 0" may take in the generator.
const TINY: f64 = 1e-300;

fn noise_term(rng: &mut Rng) -> NoiseTerm {
    let alpha = rng.below(5) as i32 - 2;
    match rng.below(5) {
        0 => NoiseTerm::WhiteFrequency { sigma_y_1s: edge(rng, TINY, 1e-3) },
        1 => NoiseTerm::FlickerFloor { sigma_y: edge(rng, TINY, 1e-3) },
        2 => NoiseTerm::RandomWalk { sigma_y_1s: edge(rng, TINY, 1e-3) },
        3 => NoiseTerm::PowerLaw { alpha, coefficient: edge(rng, TINY, 1e30), unit: if rng.chance(0.5) { SpectrumUnit::SY } else { SpectrumUnit::SNu } },
        _ => {
            let unit = *rng.pick(&[SpectrumUnit::SY, SpectrumUnit::SNu, SpectrumUnit::LDbc]);
            let value = if unit == SpectrumUnit::LDbc { -300.0 + 400.0 * rng.unit() } else { edge(rng, TINY, 1e30) };
            NoiseTerm::PowerLawAt { alpha, at_hz: edge(rng, TINY, 1e12), value, unit }
        }
    }
}

fn table(rng: &mut Rng) -> SpectrumTable {
    let rows = match rng.below(10) {
        0..=2 => 2,
        3 => MAX_TABLE_ROWS,
        _ => 2 + rng.below(200),
    };
    let unit = *rng.pick(&[SpectrumUnit::SY, SpectrumUnit::SNu, SpectrumUnit::LDbc]);
    let lo = edge(rng, TINY, 1e6).min(1e11);
    let hi = edge(rng, lo * 10.0, 1e12).max(lo * 1.000_001).min(1e12);
    let mut points = Vec::with_capacity(rows);
    for k in 0..rows {
        let f = lo * (hi / lo).powf(k as f64 / (rows - 1) as f64);
        let v = if unit == SpectrumUnit::LDbc { -300.0 + 400.0 * rng.unit() } else { rng.log_uniform(TINY, 1e29) };
        points.push([f, v]);
    }
    // Rounding can make neighbours equal at the ends of a wide range; keep them increasing.
    for k in 1..rows {
        if points[k][0] <= points[k - 1][0] {
            points[k][0] = f64::from_bits(points[k - 1][0].to_bits() + 1);
        }
    }
    SpectrumTable { unit, points }
}

/// A design with every field from the schema, each at an edge of its allowed range or
/// log-uniform within it, the structure kept valid (pulses together, free segments only
/// between pulses, the cycle-dependent limits applied last).
pub fn extreme_design(rng: &mut Rng) -> Design {
    let mut d = clockwright_core::demo::designs().remove(rng.below(4));
    d.name = "x".repeat(rng.below(caps::MAX_NAME_CHARS + 1));
    d.transition.frequency_hz = edge(rng, caps::MIN_FREQUENCY_HZ, caps::MAX_FREQUENCY_HZ);
    d.transition.lifetime_s = if rng.chance(0.3) { None } else { Some(edge(rng, caps::MIN_LIFETIME_S, 1e12)) };
    d.transition.k_alpha = if rng.chance(0.5) { None } else { Some(signed(rng, caps::MAX_K_ALPHA)) };
    d.atoms.count = match rng.below(3) {
        0 => 1,
        1 => caps::MAX_ATOMS,
        _ => rng.log_uniform(1.0, caps::MAX_ATOMS as f64).round() as u64,
    };
    d.atoms.entanglement = match rng.below(3) {
        0 => Entanglement::None,
        1 => Entanglement::Squeezed { gain_db: edge(rng, 1e-9, 30.0) * if rng.chance(0.1) { 0.0 } else { 1.0 } },
        _ => Entanglement::Ghz,
    };
    let pulses = match rng.below(4) {
        0 => 1,
        1 => caps::MAX_SEGMENTS - 2,
        _ => 1 + rng.below(6),
    };
    let dead_before = rng.below(3).min(caps::MAX_SEGMENTS - 2 * pulses.min(31) + 1);
    let mut segs = Vec::new();
    let labels = [DeadLabel::Cooling, DeadLabel::StatePreparation, DeadLabel::Detection, DeadLabel::Other];
    for _ in 0..dead_before {
        segs.push(Segment::Dead { label: *rng.pick(&labels), duration_s: edge(rng, caps::MIN_DURATION_S, caps::MAX_DURATION_S) });
    }
    for k in 0..pulses {
        if segs.len() >= caps::MAX_SEGMENTS - 1 {
            break;
        }
        if k > 0 && rng.chance(0.5) {
            segs.push(Segment::Free { duration_s: edge(rng, caps::MIN_DURATION_S, caps::MAX_DURATION_S) });
        }
        segs.push(Segment::Pulse {
            duration_s: edge(rng, caps::MIN_DURATION_S, caps::MAX_DURATION_S),
            area_pi: edge(rng, 1e-12, caps::MAX_AREA_PI),
            phase_deg: signed(rng, 3600.0),
            detuning_offset_hz: signed(rng, 1e9),
        });
    }
    if segs.len() < caps::MAX_SEGMENTS && rng.chance(0.7) {
        segs.push(Segment::Dead { label: DeadLabel::Detection, duration_s: edge(rng, caps::MIN_DURATION_S, caps::MAX_DURATION_S) });
    }
    d.sequence.segments = segs;
    d.detection.rounds = match rng.below(3) {
        0 => 1,
        1 => caps::MAX_ROUNDS,
        _ => 1 + rng.below(caps::MAX_ROUNDS as usize) as u32,
    };
    let u = rng.unit() * 0.49;
    d.detection.misread_ground = *rng.pick(&[0.0, 0.49, u]);
    let u = rng.unit() * 0.49;
    d.detection.misread_excited = *rng.pick(&[0.0, 0.49, u]);
    let terms = match rng.below(4) {
        0 => 0,
        1 => caps::MAX_NOISE_TERMS,
        _ => 1 + rng.below(4),
    };
    d.laser.noise = (0..terms).map(|_| noise_term(rng)).collect();
    d.laser.table = if terms == 0 || rng.chance(0.2) { Some(table(rng)) } else { None };
    d.laser.drift_per_s = signed(rng, 1e-6);
    d.lock.operating_point = if rng.chance(0.5) { OperatingPointRule::BestSlopeToNoise } else { OperatingPointRule::HalfMaximum };
    // Limits that depend on the cycle.
    let cycle = d.cycle_time_s();
    d.laser.high_cutoff_hz = edge(rng, TINY, 1e12).min(caps::MAX_CUTOFF_TIMES_CYCLE / cycle);
    d.lock.attack_time_s = edge(rng, cycle.min(1e7), 1e7).max(cycle);
    d
}

/// Options of an evaluation: the page's, or each at an edge of its range.
pub fn extreme_options(rng: &mut Rng, cycle: f64) -> EvalOptions {
    if rng.chance(0.3) {
        return EvalOptions::default();
    }
    let tp = 2 + rng.below(clockwright_core::budget::caps::MAX_TAU_POINTS - 1);
    let pp = 16 + rng.below(3985);
    EvalOptions {
        target_instability: edge(rng, TINY, 1e-6),
        tau_points: *rng.pick(&[2, clockwright_core::budget::caps::MAX_TAU_POINTS, tp]),
        tau_max_s: edge(rng, (cycle * 1.000_001).min(1e9), 1e9),
        plot_points: *rng.pick(&[16, 4000, pp]),
    }
}

fn make_extreme(rng: &mut Rng, _: &Seeds) -> Vec<u8> {
    let d = extreme_design(rng);
    let o = extreme_options(rng, d.cycle_time_s());
    serde_json::to_vec_pretty(&json!({ "design": d, "options": o })).unwrap_or_default()
}

/// `{"design": ..., "options": ...}` evaluated as the page's `evaluate(design, options)`.
pub fn run_extreme(bytes: &[u8]) -> Outcome {
    let mut v = match json_of(bytes) {
        Ok(v) => v,
        Err(e) => return Outcome::Refused(e),
    };
    let d = v.get_mut("design").map(Value::take).unwrap_or(Value::Null);
    let o = v.get_mut("options").map(Value::take).unwrap_or(Value::Null);
    walk(crate::page::evaluate_value(d, o))
}
