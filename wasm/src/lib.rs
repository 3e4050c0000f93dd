//! WebAssembly binding of `clockwright-core`.
//!
//! This crate converts and forwards, nothing else: JavaScript values come in through
//! serde-wasm-bindgen, go to the core as JSON values (so the core's own parsing, schema
//! migration and validation apply), and results go back as plain JavaScript objects
//! (`Option` as `null`, maps as objects). Every failure becomes a JavaScript `Error` whose
//! message is the readable problem list and whose `problems` property holds the same
//! problems as `{path, value, allowed}` objects.
//!
//! The conversion layer (`*_value` functions) is plain Rust so it is tested natively; the
//! `#[wasm_bindgen]` functions only move values across the boundary.

use clockwright_core::design::SCHEMA_VERSION;
use clockwright_core::design::Segment;
use clockwright_core::error::Problem;
use clockwright_core::noise::SpectrumTable;
use clockwright_core::sequence::{Preset, PresetInfo};
use clockwright_core::{Design, EvalOptions, Evaluation, InputError};
use serde::Serialize;
use serde_json::Value;
use wasm_bindgen::prelude::*;

mod simulate;
mod pair;
mod study;

// ---------------------------------------------------------------------------------------
// Conversion layer (native, tested).
// ---------------------------------------------------------------------------------------

/// Reads a design document through the core (schema check and migration included).
pub fn design_from_value(value: Value) -> Result<Design, InputError> {
    Design::from_value(value)
}

/// Reads evaluation options; `null` (or an absent argument) means the defaults.
pub fn options_from_value(value: Value) -> Result<EvalOptions, InputError> {
    if value.is_null() {
        return Ok(EvalOptions::default());
    }
    serde_json::from_value(value).map_err(|e| {
        InputError::single("options", "", format!("must be an object with target_instability, tau_points, tau_max_s, plot_points (all optional): {e}"))
    })
}

/// Parses and evaluates one design.
pub fn evaluate_value(design: Value, options: Value) -> Result<Evaluation, InputError> {
    let design = design_from_value(design)?;
    let options = options_from_value(options)?;
    clockwright_core::evaluate(&design, &options)
}

/// Every problem of a design document; empty when it is fine.
pub fn validate_value(design: Value) -> Vec<Problem> {
    match design_from_value(design).and_then(|d| d.validate()) {
        Ok(()) => Vec::new(),
        Err(e) => e.problems,
    }
}

/// The probe segments of a preset.
pub fn preset_segments_value(preset: Value) -> Result<Vec<Segment>, InputError> {
    let preset: Preset = serde_json::from_value(preset).map_err(|e| {
        InputError::single("preset", "", format!("must be one of {{kind: rabi, probe_time_s}}, {{kind: ramsey, pulse_s, free_s}}, {{kind: hyper_ramsey, pulse_s, free_s}}: {e}"))
    })?;
    preset.validate()?;
    Ok(preset.segments())
}

/// The demo designs.
pub fn demo_designs() -> Vec<Design> {
    clockwright_core::demo::designs()
}

/// The sequence presets.
pub fn preset_list() -> Vec<PresetInfo> {
    clockwright_core::sequence::presets()
}

/// A spectrum table from CSV text.
pub fn parse_spectrum_csv(text: &str) -> Result<SpectrumTable, InputError> {
    SpectrumTable::from_csv(text)
}

// ---------------------------------------------------------------------------------------
// The boundary.
// ---------------------------------------------------------------------------------------

/// Turns an input error into a JavaScript `Error` (message: one "path: value; allowed"
/// line per problem; `problems`: the same as objects). The one error helper of the binding.
pub(crate) fn js_error(e: &InputError) -> JsValue {
    let err = js_sys::Error::new(&e.to_string());
    if let Ok(problems) = e.problems.serialize(&serde_wasm_bindgen::Serializer::json_compatible()) {
        let _ = js_sys::Reflect::set(&err, &JsValue::from_str("problems"), &problems);
    }
    err.into()
}

pub(crate) fn from_js(value: JsValue, what: &str) -> Result<Value, JsValue> {
    if value.is_undefined() {
        return Ok(Value::Null);
    }
    serde_wasm_bindgen::from_value(value)
        .map_err(|e| js_error(&InputError::single(what, "", format!("must be a plain JSON-like object: {e}"))))
}

pub(crate) fn to_js<T: Serialize>(value: &T) -> Result<JsValue, JsValue> {
    value
        .serialize(&serde_wasm_bindgen::Serializer::json_compatible())
        .map_err(|e| js_error(&InputError::single("(result)", "", format!("could not be converted to JavaScript: {e}"))))
}

/// Evaluates one design: the Allan deviation of the locked laser and its breakdown.
/// Throws an `Error` with `problems` when the design or the options are invalid.
#[wasm_bindgen(js_name = evaluate, unchecked_return_type = "Evaluation")]
pub fn evaluate_js(
    #[wasm_bindgen(unchecked_param_type = "Design")] design: JsValue,
    #[wasm_bindgen(unchecked_param_type = "Partial<EvalOptions> | null | undefined")] options: JsValue,
) -> Result<JsValue, JsValue> {
    let design = from_js(design, "(document)")?;
    let options = from_js(options, "options")?;
    let evaluation = evaluate_value(design, options).map_err(|e| js_error(&e))?;
    to_js(&evaluation)
}

/// Checks a design document; returns every problem, or an empty array when it is fine.
#[wasm_bindgen(js_name = validate, unchecked_return_type = "Problem[]")]
pub fn validate_js(#[wasm_bindgen(unchecked_param_type = "Design")] design: JsValue) -> Result<JsValue, JsValue> {
    let problems = match from_js(design, "(document)") {
        Ok(v) => validate_value(v),
        Err(_) => vec![Problem { path: "(document)".into(), value: String::new(), allowed: "must be a plain JSON-like object".into() }],
    };
    to_js(&problems)
}

/// The four demo designs.
#[wasm_bindgen(js_name = demoDesigns, unchecked_return_type = "Design[]")]
pub fn demo_designs_js() -> Result<JsValue, JsValue> {
    to_js(&demo_designs())
}

/// The sequence presets with their typical parameters.
#[wasm_bindgen(js_name = presets, unchecked_return_type = "PresetInfo[]")]
pub fn presets_js() -> Result<JsValue, JsValue> {
    to_js(&preset_list())
}

/// The probe segments (pulses and free evolution) of a preset.
#[wasm_bindgen(js_name = presetSegments, unchecked_return_type = "Segment[]")]
pub fn preset_segments_js(#[wasm_bindgen(unchecked_param_type = "Preset")] preset: JsValue) -> Result<JsValue, JsValue> {
    let preset = from_js(preset, "preset")?;
    let segments = preset_segments_value(preset).map_err(|e| js_error(&e))?;
    to_js(&segments)
}

/// Parses a spectrum table from CSV text (header `f_hz,s_y`, `f_hz,s_nu` or `f_hz,l_dbc`).
/// Throws an `Error` whose problems name the CSV line.
#[wasm_bindgen(js_name = parseSpectrumCsv, unchecked_return_type = "SpectrumTable")]
pub fn parse_spectrum_csv_js(text: &str) -> Result<JsValue, JsValue> {
    let table = parse_spectrum_csv(text).map_err(|e| js_error(&e))?;
    to_js(&table)
}

/// The design schema version this build writes and reads.
#[wasm_bindgen(js_name = schemaVersion)]
pub fn schema_version_js() -> u32 {
    SCHEMA_VERSION
}

/// TypeScript declarations of every shape that crosses the boundary (emitted into the
/// generated .d.ts by the section below; the tests read it too).
#[allow(dead_code)]
const TS_SHAPES: &str = r#"
/** One problem with an input: where, what was given, what is allowed. */
export interface Problem { path: string; value: string; allowed: string; }
/** The Error thrown for invalid input; `message` lists the problems one per line. */
export interface InputError extends Error { problems: Problem[]; }

export type Entanglement =
  | { kind: "none" }
  | { kind: "squeezed"; gain_db: number }
  | { kind: "ghz" };
export type DeadLabel = "cooling" | "state_preparation" | "detection" | "other";
export type Segment =
  | { kind: "pulse"; duration_s: number; area_pi: number; phase_deg: number; detuning_offset_hz: number }
  | { kind: "free"; duration_s: number }
  | { kind: "dead"; label: DeadLabel; duration_s: number };
export type SpectrumUnit = "s_y" | "s_nu" | "l_dbc";
export type NoiseTerm =
  | { kind: "power_law"; alpha: number; coefficient: number; unit: SpectrumUnit }
  | { kind: "power_law_at"; alpha: number; at_hz: number; value: number; unit: SpectrumUnit }
  | { kind: "white_frequency"; sigma_y_1s: number }
  | { kind: "flicker_floor"; sigma_y: number }
  | { kind: "random_walk"; sigma_y_1s: number };
export interface SpectrumTable { unit: SpectrumUnit; points: [number, number][]; }
export type OperatingPointRule = "best_slope_to_noise" | "half_maximum";

export interface Transition { label: string; frequency_hz: number; lifetime_s: number | null; }
export interface Atoms { count: number; entanglement: Entanglement; }
export interface Sequence { segments: Segment[]; }
export interface Detection { rounds: number; misread_ground: number; misread_excited: number; }
export interface Laser {
  label: string;
  noise: NoiseTerm[];
  table: SpectrumTable | null;
  high_cutoff_hz: number;
  drift_per_s: number;
}
export interface Lock { attack_time_s: number; operating_point: OperatingPointRule; }
/** One clock design document. */
export interface Design {
  schema_version: number;
  name: string;
  transition: Transition;
  atoms: Atoms;
  sequence: Sequence;
  detection: Detection;
  laser: Laser;
  lock: Lock;
}

export interface EvalOptions { target_instability: number; tau_points: number; tau_max_s: number; plot_points: number; }
export type Mechanism = "laser" | "projection" | "dick";
export interface OperatingPoint {
  detuning_hz: number;
  excitation: number;
  measured_excitation: number;
  slope_per_hz: number;
  best_detuning_hz: number;
  half_maximum_detuning_hz: number;
  peak_excitation: number;
}
export interface ProjectionResult {
  sigma_1s: number;
  effective_atoms: number;
  misread_ground_effective: number;
  misread_excited_effective: number;
  squeezing_factor: number;
}
export interface DickResult {
  /** Dick-effect Allan deviation at 1 s (white: sigma(tau) = this / sqrt(tau)). */
  sigma_1s: number;
  /** Harmonics summed one by one before the analytic tail. */
  harmonics_summed: number;
  /** Bound on the relative error of the Dick variance from ending the sum there. */
  truncation_bound_relative: number;
  /** |g_m|^2 / g_0^2 for m = 1, 2, ... (the first 64). */
  weights: number[];
  /** g_0 = (1/T_c) times the integral of g(t) over one cycle (the weights are relative to it). */
  g0: number;
}
export interface Curve {
  tau_s: number[];
  total: number[];
  laser: number[];
  projection: number[];
  dick: number[];
  mod_total: number[];
  free_laser: number[];
}
export interface TargetResult {
  target: number;
  time_s: number | null;
  note: string;
  /** The mechanism with the largest share of the variance at time_s (null without it). */
  dominant: Mechanism | null;
}
export interface Limits {
  probe_phase_rms_rad: number;
  coherence_probe_limit_s: number | null;
  probe_over_lifetime: number;
  servo_lag_fractional: number;
  notes: string[];
}
export interface Checkpoint { tau_s: number; total: number; laser: number; projection: number; dick: number; dominant: Mechanism; }
export interface SensitivitySamples { t_s: number[]; g: number[]; }
export interface LineShape { detuning_hz: number[]; excitation: number[]; measured: number[]; }
/** Everything one evaluation returns. */
export interface Evaluation {
  cycle_time_s: number;
  probe_time_s: number;
  dead_time_s: number;
  operating_point: OperatingPoint;
  projection: ProjectionResult;
  dick: DickResult;
  sigma_1s_equivalent: number;
  curve: Curve;
  target: TargetResult;
  limits: Limits;
  sensitivity: SensitivitySamples;
  line_shape: LineShape;
  checkpoints: Checkpoint[];
}

export type Preset =
  | { kind: "rabi"; probe_time_s: number }
  | { kind: "ramsey"; pulse_s: number; free_s: number }
  | { kind: "hyper_ramsey"; pulse_s: number; free_s: number };
export interface PresetInfo { id: string; title: string; preset: Preset; }
"#;

#[wasm_bindgen(typescript_custom_section)]
const TS_SECTION: &'static str = TS_SHAPES;

#[cfg(test)]
mod tests {
    use super::*;
    use serde_json::json;

    fn demo_value(i: usize) -> Value {
        serde_json::to_value(&demo_designs()[i]).unwrap()
    }

    #[test]
    fn demo_designs_round_trip_and_validate() {
        let designs = demo_designs();
        assert_eq!(designs.len(), 4);
        for (i, d) in designs.iter().enumerate() {
            assert!(validate_value(demo_value(i)).is_empty(), "demo design {i} ({}) should validate", d.name);
            assert_eq!(&design_from_value(demo_value(i)).unwrap(), d);
        }
    }

    #[test]
    fn evaluate_forwards_to_core_unchanged() {
        let d = demo_designs().remove(0);
        let direct = clockwright_core::evaluate(&d, &EvalOptions::default()).unwrap();
        let via = evaluate_value(demo_value(0), Value::Null).unwrap();
        assert_eq!(direct, via);
    }

    #[test]
    fn options_default_when_null_and_partial_objects_fill_in() {
        assert_eq!(options_from_value(Value::Null).unwrap(), EvalOptions::default());
        let o = options_from_value(json!({"target_instability": 3e-18})).unwrap();
        assert_eq!(o.target_instability, 3e-18);
        assert_eq!(o.tau_points, EvalOptions::default().tau_points);
        let e = options_from_value(json!({"target": 1e-18})).unwrap_err();
        assert_eq!(e.problems[0].path, "options");
        assert!(e.problems[0].allowed.contains("target_instability"));
    }

    #[test]
    fn invalid_field_is_reported_with_its_path_and_evaluate_refuses() {
        let mut v = demo_value(0);
        v["atoms"]["count"] = json!(0);
        let problems = validate_value(v.clone());
        assert!(problems.iter().any(|p| p.path == "atoms.count" && p.value == "0"), "{problems:?}");
        let e = evaluate_value(v, Value::Null).unwrap_err();
        assert!(e.to_string().contains("atoms.count: 0;"), "{e}");
    }

    #[test]
    fn negative_segment_duration_names_the_segment() {
        let mut v = demo_value(1);
        v["sequence"]["segments"][0]["duration_s"] = json!(-0.1);
        let problems = validate_value(v);
        assert!(problems.iter().any(|p| p.path == "sequence.segments[0].duration_s"), "{problems:?}");
    }

    #[test]
    fn wrong_schema_version_and_non_objects_are_problems_not_panics() {
        let mut v = demo_value(0);
        v["schema_version"] = json!(99);
        let problems = validate_value(v);
        assert_eq!(problems[0].path, "schema_version");
        assert!(!validate_value(json!("text")).is_empty());
        assert!(!validate_value(Value::Null).is_empty());
        assert!(evaluate_value(json!([1, 2]), Value::Null).is_err());
    }

    #[test]
    fn presets_give_probe_segments_only() {
        let list = preset_list();
        assert!(!list.is_empty());
        for info in list {
            let segs = preset_segments_value(serde_json::to_value(info.preset).unwrap()).unwrap();
            assert!(!segs.is_empty(), "{}", info.id);
            assert!(segs.iter().all(|s| !matches!(s, Segment::Dead { .. })), "{}", info.id);
        }
        let e = preset_segments_value(json!({"kind": "spin_echo"})).unwrap_err();
        assert_eq!(e.problems[0].path, "preset");
    }

    #[test]
    fn spectrum_csv_is_forwarded_with_line_numbers() {
        let t = parse_spectrum_csv("f_hz,s_y\n1,1e-30\n10,1e-31\n").unwrap();
        assert_eq!(t.points.len(), 2);
        let e = parse_spectrum_csv("f_hz,s_y\n1,1e-30\n10,abc\n").unwrap_err();
        assert_eq!(e.problems[0].path, "line 3");
    }

    #[test]
    fn serialised_shapes_match_the_typescript_declarations() {
        // Every key the core serialises must be declared in TS_SHAPES (the browser tests
        // check the other direction with the TypeScript compiler).
        let eval = evaluate_value(demo_value(0), Value::Null).unwrap();
        shapes::assert_declared(&serde_json::to_value(&eval).unwrap());
        for d in demo_designs() {
            shapes::assert_declared(&serde_json::to_value(&d).unwrap());
        }
    }
}

/// The check shared by every module's tests: each key a value serialises to is declared in
/// one of the TypeScript sections (the browser tests check the other direction with tsc).
#[cfg(test)]
pub(crate) mod shapes {
    use serde_json::Value;

    fn collect(v: &Value, keys: &mut Vec<String>) {
        match v {
            Value::Object(m) => {
                for (k, x) in m {
                    keys.push(k.clone());
                    collect(x, keys);
                }
            }
            Value::Array(a) => a.iter().for_each(|x| collect(x, keys)),
            _ => {}
        }
    }

    /// Panics naming the first key of `v` that no TypeScript section declares.
    pub(crate) fn assert_declared(v: &Value) {
        let all = [super::TS_SHAPES, super::pair::TS_PAIR_SHAPES, super::study::TS_STUDY_SHAPES, super::simulate::TS_SHAPES].concat();
        let mut keys = Vec::new();
        collect(v, &mut keys);
        for k in keys {
            assert!(all.contains(&format!(" {k}:")) || all.contains(&format!(" {k}?:")), "key `{k}` is not declared in the TypeScript shapes");
        }
    }
}
