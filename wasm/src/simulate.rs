//! WebAssembly exports of the cycle-by-cycle simulation (run in chunks from a Web Worker,
//! with progress and cancel) and of the measured-data import.
//!
//! As in lib.rs, the conversion layer is plain Rust tested natively; the `#[wasm_bindgen]`
//! items only move values across the boundary. To cancel a run, stop calling `advance` and
//! call `free()` (or terminate the worker).

use crate::{from_js, js_error, to_js};
use clockwright_core::estimate::Options;
use clockwright_core::measured::{import_csv, MeasuredResult};
use clockwright_core::simulate::{SimOptions, Simulation, MAX_CYCLES, MAX_SETTLE_CYCLES};
use clockwright_core::{Design, InputError};
use serde_json::Value;
use wasm_bindgen::prelude::*;

// ---------------------------------------------------------------------------------------
// Conversion layer (native, tested).
// ---------------------------------------------------------------------------------------

/// Reads simulation options; `null` means the defaults.
pub fn sim_options_from_value(value: Value) -> Result<SimOptions, InputError> {
    if value.is_null() {
        return Ok(SimOptions::default());
    }
    serde_json::from_value(value).map_err(|e| {
        InputError::single(
            "options",
            "",
            format!("must be an object with cycles, settle_cycles, seed, pulse_substeps, second_integrator, laser_noise, initial_offset_hz, confidence, trace_cycles (all optional): {e}"),
        )
    })
}

/// Reads estimator options for imported data; `null` means the defaults.
pub fn measured_options_from_value(value: Value) -> Result<Options, InputError> {
    if value.is_null() {
        return Ok(Options::default());
    }
    serde_json::from_value(value).map_err(|e| InputError::single("options", "", format!("must be an object with taus, confidence, alpha (all optional): {e}")))
}

/// Parses the design and options and prepares a run.
pub fn start_simulation(design: Value, options: Value) -> Result<Simulation, InputError> {
    let design = Design::from_value(design)?;
    let options = sim_options_from_value(options)?;
    Simulation::new(&design, &options)
}

/// Checks a chunk size given as a JavaScript number: a whole number from 1 to the cycle cap.
pub fn chunk_cycles(max_cycles: f64) -> Result<u64, InputError> {
    let cap = (MAX_CYCLES + MAX_SETTLE_CYCLES) as f64;
    if !max_cycles.is_finite() || max_cycles < 1.0 || max_cycles > cap || max_cycles.fract() != 0.0 {
        return Err(InputError::single("maxCycles", clockwright_core::error::show(max_cycles), format!("must be a whole number from 1 to {cap:e}")));
    }
    Ok(max_cycles as u64)
}

/// Imports measured data from CSV text and estimates its Allan deviation.
pub fn import_measured_value(text: &str, options: Value) -> Result<MeasuredResult, InputError> {
    let options = measured_options_from_value(options)?;
    import_csv(text, &options)
}

// ---------------------------------------------------------------------------------------
// The boundary.
// ---------------------------------------------------------------------------------------

/// A running simulation: `new Simulation(design, options)`, then `advance(maxCycles)`
/// until `finished`, then `finish()`.
#[wasm_bindgen(js_name = Simulation)]
pub struct SimulationJs {
    inner: Option<Simulation>,
}

fn finished_error() -> JsValue {
    js_error(&InputError::single("(simulation)", "finished", "this run has finished; start a new Simulation"))
}

#[wasm_bindgen(js_class = Simulation)]
impl SimulationJs {
    /// Validates the design and options and prepares the run. Throws an `Error` with
    /// `problems` when either is invalid.
    #[wasm_bindgen(constructor)]
    pub fn new(
        #[wasm_bindgen(unchecked_param_type = "Design")] design: JsValue,
        #[wasm_bindgen(unchecked_param_type = "Partial<SimOptions> | null | undefined")] options: JsValue,
    ) -> Result<SimulationJs, JsValue> {
        let design = from_js(design, "(document)")?;
        let options = from_js(options, "options")?;
        let inner = start_simulation(design, options).map_err(|e| js_error(&e))?;
        Ok(SimulationJs { inner: Some(inner) })
    }

    /// Runs up to `maxCycles` more cycles and returns the progress.
    #[allow(non_snake_case)]
    #[wasm_bindgen(unchecked_return_type = "SimProgress")]
    pub fn advance(&mut self, maxCycles: f64) -> Result<JsValue, JsValue> {
        let n = chunk_cycles(maxCycles).map_err(|e| js_error(&e))?;
        let sim = self.inner.as_mut().ok_or_else(finished_error)?;
        to_js(&sim.advance(n))
    }

    /// The progress without running.
    #[wasm_bindgen(unchecked_return_type = "SimProgress")]
    pub fn progress(&self) -> Result<JsValue, JsValue> {
        let sim = self.inner.as_ref().ok_or_else(finished_error)?;
        to_js(&sim.progress())
    }

    /// Ends the run (early if not all cycles ran) and returns the result.
    #[wasm_bindgen(unchecked_return_type = "SimResult")]
    pub fn finish(&mut self) -> Result<JsValue, JsValue> {
        let sim = self.inner.take().ok_or_else(finished_error)?;
        let result = sim.finish().map_err(|e| js_error(&e))?;
        to_js(&result)
    }
}

/// Imports a measured-data CSV (docs/measured-data.md) and returns its Allan deviation with
/// confidence intervals and the gaps found. Throws an `Error` whose problems name the line.
#[wasm_bindgen(js_name = importMeasured, unchecked_return_type = "MeasuredResult")]
pub fn import_measured_js(text: &str, #[wasm_bindgen(unchecked_param_type = "Partial<EstimateOptions> | null | undefined")] options: JsValue) -> Result<JsValue, JsValue> {
    let options = from_js(options, "options")?;
    let result = import_measured_value(text, options).map_err(|e| js_error(&e))?;
    to_js(&result)
}

/// TypeScript declarations of the shapes of this file.
#[allow(dead_code)]
pub(crate) const TS_SHAPES: &str = r#"
export interface SimOptions {
  cycles: number;
  settle_cycles: number | null;
  seed: number;
  pulse_substeps: number;
  second_integrator: boolean;
  laser_noise: boolean;
  initial_offset_hz: number;
  confidence: number;
  trace_cycles: number;
}
export interface SimProgress {
  cycles_done: number;
  cycles_total: number;
  fraction: number;
  simulated_s: number;
  phase_excursion_cycles: number;
  off_fringe_cycles: number;
  finished: boolean;
}
export type EstimatorKind = "allan" | "modified_allan" | "hadamard";
export type AlphaSource = "given" | "identified" | "default";
export type EstimateTaus = "octave" | "all" | { list: number[] };
export interface EstimateOptions { taus: EstimateTaus; confidence: number; alpha: number | null; }
export interface EstimatePoint {
  m: number;
  tau_s: number;
  deviation: number;
  terms: number;
  edf: number;
  ci_low: number;
  ci_high: number;
  alpha: number;
  alpha_source: AlphaSource;
  alpha_m: number;
}
export interface Estimate {
  estimator: EstimatorKind;
  tau0_s: number;
  confidence: number;
  samples: number;
  gap_samples: number;
  gaps: number;
  skipped_m: number[];
  points: EstimatePoint[];
}
export interface AnalyticOverlay { tau_s: number[]; total: number[]; free_laser: number[]; }
export interface Departure { tau_s: number; simulated: number; ci_low: number; ci_high: number; analytic: number; reason: string; }
export interface FringeSummary {
  phase_excursion_cycles: number;
  off_fringe_cycles: number;
  first_off_fringe_cycle: number | null;
  edge_hz: number;
  analytic_phase_rms_rad: number;
}
export interface NoiseSummary {
  frequency_processes: number;
  phase_processes: number;
  lowest_corner_hz: number;
  white_h0: number;
  table_fit_error: number | null;
}
export interface CycleRecord {
  cycle: number;
  side: number;
  excitation: number;
  measured: number;
  correction_hz: number;
  error_hz: number;
  phase_excursion_rad: number;
}
/** Everything a finished simulation returns. */
export interface SimResult {
  design_name: string;
  cycles: number;
  settle_cycles: number;
  cycle_time_s: number;
  seed: number;
  locked: Estimate;
  free_laser: Estimate;
  analytic: AnalyticOverlay;
  departures: Departure[];
  fringe: FringeSummary;
  noise: NoiseSummary;
  notes: string[];
  trace: CycleRecord[];
}
export interface MeasuredGap { line: number; start_index: number; missing: number; }
/** The Allan deviation of imported data and what was found in the file. */
export interface MeasuredResult {
  quantity: "frequency" | "phase";
  unit: string;
  tau0_s: number;
  rows: number;
  samples: number;
  gap_samples: number;
  gap_count: number;
  gaps: MeasuredGap[];
  adev: Estimate;
  notes: string[];
}
"#;

#[wasm_bindgen(typescript_custom_section)]
const TS_SECTION: &'static str = TS_SHAPES;

#[cfg(test)]
mod tests {
    use super::*;
    use serde_json::json;

    fn demo_value(i: usize) -> Value {
        serde_json::to_value(&clockwright_core::demo::designs()[i]).unwrap()
    }

    #[test]
    fn chunked_run_forwards_to_core_unchanged_and_shapes_are_declared() {
        let opts = json!({"cycles": 64, "seed": 5, "trace_cycles": 3});
        let mut sim = start_simulation(demo_value(0), opts.clone()).unwrap();
        let mut p = sim.advance(chunk_cycles(50.0).unwrap());
        assert!(!p.finished && p.fraction > 0.0);
        while !p.finished {
            p = sim.advance(chunk_cycles(50.0).unwrap());
        }
        let via = sim.finish().unwrap();
        let d = clockwright_core::demo::designs().remove(0);
        let direct = clockwright_core::simulate::simulate(&d, &sim_options_from_value(opts).unwrap()).unwrap();
        assert_eq!(via, direct);
        use crate::shapes::assert_declared;
        assert_declared(&serde_json::to_value(&via).unwrap());
        assert_declared(&serde_json::to_value(&p).unwrap());
        assert_declared(&serde_json::to_value(SimOptions::default()).unwrap());
        let m = import_measured_value("# tau0_s: 1\ny\n1\n2\n\n3\n4\n", Value::Null).unwrap();
        assert_declared(&serde_json::to_value(&m).unwrap());
    }

    #[test]
    fn bad_options_chunks_and_csv_are_errors_with_paths() {
        assert_eq!(start_simulation(demo_value(0), json!({"cycles": 3})).err().unwrap().problems[0].path, "options.cycles");
        assert_eq!(start_simulation(demo_value(0), json!({"cyclez": 3})).err().unwrap().problems[0].path, "options");
        assert_eq!(start_simulation(json!({"schema_version": 1}), Value::Null).err().unwrap().problems[0].path, "(document)");
        for bad in [0.0, -1.0, 1.5, f64::NAN, f64::INFINITY, 1e300] {
            assert_eq!(chunk_cycles(bad).unwrap_err().problems[0].path, "maxCycles");
        }
        assert_eq!(chunk_cycles(1000.0).unwrap(), 1000);
        let e = import_measured_value("t_s,y\n0,1\n1,2\n1,3\n", Value::Null).unwrap_err();
        assert_eq!(e.problems[0].path, "line 4");
        assert_eq!(import_measured_value("y\n1\n", json!({"confidence": "high"})).unwrap_err().problems[0].path, "options");
    }
}
