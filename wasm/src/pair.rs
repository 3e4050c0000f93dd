//! Binding of the species catalog, clock-pair comparisons and their reach.
//!
//! Same pattern as the single-design exports: the `*_value` functions are plain Rust and
//! tested natively; the `#[wasm_bindgen]` functions only move values across the boundary and
//! turn input errors into JavaScript `Error`s with a `problems` property.

use crate::{from_js, js_error, to_js};
use clockwright_core::error::Problem;
use clockwright_core::pair::{evaluate_pair, PairDocument, PairEvaluation, PairOptions};
use clockwright_core::reach::{reach, Reach, ReachOptions};
use clockwright_core::species::Species;
use clockwright_core::InputError;
use serde_json::Value;
use wasm_bindgen::prelude::*;

/// Reads a pair document through the core (schema and paths from `pair.`).
pub fn pair_from_value(value: Value) -> Result<PairDocument, InputError> {
    PairDocument::from_value(value)
}

/// Reads pair options; `null` means the defaults.
pub fn pair_options_from_value(value: Value) -> Result<PairOptions, InputError> {
    if value.is_null() {
        return Ok(PairOptions::default());
    }
    serde_json::from_value(value).map_err(|e| InputError::single("options", "", format!("must be an object with tau_points, tau_max_s (both optional): {e}")))
}

/// Reads reach options; `null` means the defaults.
pub fn reach_options_from_value(value: Value) -> Result<ReachOptions, InputError> {
    if value.is_null() {
        return Ok(ReachOptions::default());
    }
    serde_json::from_value(value).map_err(|e| {
        InputError::single(
            "options",
            "",
            format!("must be an object with rho_dm_gev_per_cm3, coherence_periods, stochastic_confidence, mass_points, mass_min_ev, mass_max_ev, gravity_m_s2, height_target_m, tau_points, tau_max_s (all optional): {e}"),
        )
    })
}

/// Parses and evaluates a pair: the ratio's instability with its breakdown.
pub fn evaluate_pair_value(doc: Value, options: Value) -> Result<PairEvaluation, InputError> {
    let doc = pair_from_value(doc)?;
    let options = pair_options_from_value(options)?;
    evaluate_pair(&doc, &options)
}

/// Parses a pair and computes its reach.
pub fn reach_value(doc: Value, options: Value) -> Result<Reach, InputError> {
    let doc = pair_from_value(doc)?;
    let options = reach_options_from_value(options)?;
    reach(&doc, &options)
}

/// Every problem of a pair document; empty when it is fine.
pub fn validate_pair_value(doc: Value) -> Vec<Problem> {
    match pair_from_value(doc).and_then(|p| p.validate()) {
        Ok(()) => Vec::new(),
        Err(e) => e.problems,
    }
}

/// The species catalog.
pub fn species_list() -> &'static [Species] {
    clockwright_core::species::catalog()
}

/// The catalog of clock transitions, each value with its source.
#[wasm_bindgen(js_name = speciesCatalog, unchecked_return_type = "Species[]")]
pub fn species_catalog_js() -> Result<JsValue, JsValue> {
    to_js(&species_list())
}

/// The demo pair documents.
#[wasm_bindgen(js_name = demoPairs, unchecked_return_type = "PairDocument[]")]
pub fn demo_pairs_js() -> Result<JsValue, JsValue> {
    to_js(&clockwright_core::demo::pairs())
}

/// Checks a pair document; returns every problem, or an empty array when it is fine.
#[wasm_bindgen(js_name = validatePair, unchecked_return_type = "Problem[]")]
pub fn validate_pair_js(#[wasm_bindgen(unchecked_param_type = "PairDocument")] doc: JsValue) -> Result<JsValue, JsValue> {
    let problems = match from_js(doc, "pair") {
        Ok(v) => validate_pair_value(v),
        Err(_) => vec![Problem { path: "pair".into(), value: String::new(), allowed: "must be a plain JSON-like object".into() }],
    };
    to_js(&problems)
}

/// Evaluates the ratio of two clocks. Throws an `Error` with `problems` on invalid input.
#[wasm_bindgen(js_name = evaluatePair, unchecked_return_type = "PairEvaluation")]
pub fn evaluate_pair_js(
    #[wasm_bindgen(unchecked_param_type = "PairDocument")] doc: JsValue,
    #[wasm_bindgen(unchecked_param_type = "Partial<PairOptions> | null | undefined")] options: JsValue,
) -> Result<JsValue, JsValue> {
    let doc = from_js(doc, "pair")?;
    let options = from_js(options, "options")?;
    let e = evaluate_pair_value(doc, options).map_err(|e| js_error(&e))?;
    to_js(&e)
}

/// What a pair reaches: alpha drift bound, dark-matter d_e reach, levelling.
/// Throws an `Error` with `problems` on invalid input.
#[wasm_bindgen(js_name = reach, unchecked_return_type = "Reach")]
pub fn reach_js(
    #[wasm_bindgen(unchecked_param_type = "PairDocument")] doc: JsValue,
    #[wasm_bindgen(unchecked_param_type = "Partial<ReachOptions> | null | undefined")] options: JsValue,
) -> Result<JsValue, JsValue> {
    let doc = from_js(doc, "pair")?;
    let options = from_js(options, "options")?;
    let r = reach_value(doc, options).map_err(|e| js_error(&e))?;
    to_js(&r)
}

/// TypeScript declarations of the shapes above (merged with those of lib.rs).
#[allow(dead_code)]
pub(crate) const TS_PAIR_SHAPES: &str = r#"
/** Optional catalog fields of a transition (merged into Transition). */
export interface Transition { species?: string; k_alpha?: number; }

export interface Sourced { value: number; source: string; }
export interface SourcedRange { value: number; low: number; high: number; source: string; }
export type Carrier = "ion" | "neutral" | "nucleus";
/** One clock transition of the catalog. */
export interface Species {
  id: string;
  name: string;
  carrier: Carrier;
  nu0_hz: Sourced;
  lifetime_s: SourcedRange;
  k_alpha: SourcedRange;
  typical_count: Sourced;
}

export type Comparison =
  | { kind: "independent_lasers" }
  | { kind: "shared_laser" }
  | { kind: "correlation"; dark_time_s: number };
export interface Link { label: string; noise: NoiseTerm[]; high_cutoff_hz: number; }
export interface Campaign {
  sessions: number;
  session_length_s: number;
  spacing_s: number;
  uptime: number;
  systematic_per_session: number;
}
/** Two designs and how they are compared. */
export interface PairDocument {
  schema_version: number;
  name: string;
  a: Design;
  b: Design;
  comparison: Comparison;
  link?: Link;
  campaign: Campaign;
}
export interface PairOptions { tau_points: number; tau_max_s: number; }
export interface RatioPart { id: string; label: string; sigma: number[]; }
export interface SharedResult {
  dick_differential_1s: number;
  dick_a_alone_1s: number;
  dick_b_alone_1s: number;
  projection_a_1s: number;
  projection_b_1s: number;
  harmonics_summed: number;
  truncation_bound_relative: number;
}
export interface CorrelationResult {
  dark_time_s: number;
  contrast_a: number;
  contrast_b: number;
  phase_per_cycle_rad: number;
  sigma_1s: number;
  optimum_dark_time_s: number | null;
  sigma_1s_at_optimum: number | null;
}
/** The ratio's instability. */
export interface PairEvaluation {
  comparison: Comparison;
  cycle_time_s: number;
  tau_s: number[];
  total: number[];
  mod_total: number[];
  parts: RatioPart[];
  k_alpha_a: number | null;
  k_alpha_b: number | null;
  delta_k: number | null;
  shared: SharedResult | null;
  correlation: CorrelationResult | null;
  assumptions: string[];
  notes: string[];
  checkpoints: PairCheckpoint[];
}
/** The ratio at 1 s, 1000 s and one day (sigma null below one comparison cycle). */
export interface PairCheckpoint { tau_s: number; sigma: number | null; }

export interface ReachOptions {
  rho_dm_gev_per_cm3: number;
  coherence_periods: number;
  stochastic_confidence: number;
  mass_points: number;
  mass_min_ev: number;
  mass_max_ev: number;
  gravity_m_s2: number;
  height_target_m: number;
  tau_points: number;
  tau_max_s: number;
}
export interface DriftBound {
  delta_k: number | null;
  session_live_time_s: number;
  session_statistical: number;
  session_total: number;
  ratio_drift_per_year: number | null;
  alpha_drift_per_year: number | null;
  fit_model: string;
  note: string;
}
export interface DarkMatterReach {
  mass_ev: number[];
  frequency_hz: number[];
  alpha_amplitude_per_d_e: number[];
  ratio_psd_per_hz: number[];
  ratio_amplitude: number[];
  k_effective: number[];
  coherence_time_s: number[];
  within_coherence: boolean[];
  d_e: (number | null)[];
  note: string;
}
export interface Levelling {
  tau_s: number[];
  height_m: number[];
  target_m: number;
  time_to_target_s: number | null;
  note: string;
  checkpoints: HeightCheckpoint[];
}
/** Height resolution at 1 s, 1000 s and one day (null below one comparison cycle). */
export interface HeightCheckpoint { tau_s: number; height_m: number | null; }
/** What a pair reaches over its campaign. */
export interface Reach {
  campaign_span_s: number;
  live_time_s: number;
  drift: DriftBound;
  dark_matter: DarkMatterReach;
  levelling: Levelling;
  assumptions: string[];
}
"#;

#[wasm_bindgen(typescript_custom_section)]
const TS_PAIR_SECTION: &'static str = TS_PAIR_SHAPES;

#[cfg(test)]
mod tests {
    use super::*;
    use serde_json::json;

    fn demo_pair_value() -> Value {
        serde_json::to_value(&clockwright_core::demo::pairs()[0]).unwrap()
    }

    #[test]
    fn pair_and_reach_forward_to_core_unchanged() {
        let p = clockwright_core::demo::pairs().remove(0);
        assert_eq!(evaluate_pair_value(demo_pair_value(), Value::Null).unwrap(), evaluate_pair(&p, &PairOptions::default()).unwrap());
        let o = json!({"mass_points": 5});
        let direct = reach(&p, &ReachOptions { mass_points: 5, ..Default::default() }).unwrap();
        assert_eq!(reach_value(demo_pair_value(), o).unwrap(), direct);
        assert!(validate_pair_value(demo_pair_value()).is_empty());
    }

    #[test]
    fn bad_pair_input_is_reported_with_paths() {
        let mut v = demo_pair_value();
        v["b"]["atoms"]["count"] = json!(0);
        v["campaign"]["uptime"] = json!(0.0);
        let problems = validate_pair_value(v.clone());
        assert!(problems.iter().any(|p| p.path == "pair.b.atoms.count"), "{problems:?}");
        assert!(problems.iter().any(|p| p.path == "pair.campaign.uptime"), "{problems:?}");
        assert!(evaluate_pair_value(v.clone(), Value::Null).is_err());
        assert!(reach_value(v, Value::Null).is_err());
        assert_eq!(reach_options_from_value(json!({"rho": 1})).unwrap_err().problems[0].path, "options");
        assert_eq!(pair_options_from_value(json!({"points": 1})).unwrap_err().problems[0].path, "options");
        assert!(!validate_pair_value(json!("text")).is_empty());
        assert!(!validate_pair_value(Value::Null).is_empty());
    }

    #[test]
    fn serialised_pair_shapes_match_the_typescript_declarations() {
        use crate::shapes::assert_declared;
        // Only the pair-level objects: the designs inside are checked in lib.rs.
        let mut doc = demo_pair_value();
        doc["a"] = Value::Null;
        doc["b"] = Value::Null;
        assert_declared(&doc);
        assert_declared(&serde_json::to_value(evaluate_pair_value(demo_pair_value(), Value::Null).unwrap()).unwrap());
        assert_declared(&serde_json::to_value(reach_value(demo_pair_value(), json!({"mass_points": 3})).unwrap()).unwrap());
        assert_declared(&serde_json::to_value(species_list()).unwrap());
        for k in ["species", "k_alpha"] {
            assert!(TS_PAIR_SHAPES.contains(&format!(" {k}?:")));
        }
    }
}
