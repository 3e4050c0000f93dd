//! WebAssembly exports of the trade-off studies: `optimum`, `sweep`, the chunked `MapRun`
//! (sweeps and maps a Web Worker can advance, report and cancel) and `bands`, with the
//! chunked `BandRun`. Conversion only: requests go to `clockwright_core::study` as JSON
//! values, results come back as plain objects, errors as the binding's JS `Error`.

use crate::{from_js, js_error, to_js};
use clockwright_core::study::{self, BandRequest, BandResult, BandRun, GridRequest, GridResult, GridRun, Optimum, OptimumRequest};
use clockwright_core::{Design, InputError};
use serde_json::Value;
use wasm_bindgen::prelude::*;

// ---------------------------------------------------------------------------------------
// Conversion layer (native, tested).
// ---------------------------------------------------------------------------------------

/// The optimum probe time of one design.
pub fn optimum_value(design: Value, request: Value) -> Result<Optimum, InputError> {
    let design = Design::from_value(design)?;
    let request: OptimumRequest = study::from_value(request, "")?;
    study::optimum(&design, &request)
}

/// Prepares a sweep (`y` absent) or map (`y` given) of several designs.
pub fn grid_run_value(designs: Value, request: Value) -> Result<GridRun, InputError> {
    let designs = study::designs_from_value(designs)?;
    let request: GridRequest = study::from_value(request, "")?;
    GridRun::new(&designs, &request)
}

/// A sweep or map run to the end.
pub fn sweep_value(designs: Value, request: Value) -> Result<GridResult, InputError> {
    let mut run = grid_run_value(designs, request)?;
    while !run.is_finished() {
        run.advance(usize::MAX);
    }
    run.result()
}

/// Prepares an uncertainty study of one design.
pub fn band_run_value(design: Value, request: Value) -> Result<BandRun, InputError> {
    let design = Design::from_value(design)?;
    let request: BandRequest = study::from_value(request, "")?;
    BandRun::new(&design, &request)
}

/// Uncertainty bands run to the end.
pub fn bands_value(design: Value, request: Value) -> Result<BandResult, InputError> {
    let mut run = band_run_value(design, request)?;
    while !run.is_finished() {
        run.advance(usize::MAX);
    }
    run.result()
}

// ---------------------------------------------------------------------------------------
// The boundary.
// ---------------------------------------------------------------------------------------

/// The probe time (and optionally the detection rounds) that minimises sigma_y of the locked
/// laser at `request.tau_s`, with the mechanism that sets it.
#[wasm_bindgen(js_name = optimum, unchecked_return_type = "Optimum")]
pub fn optimum_js(
    #[wasm_bindgen(unchecked_param_type = "Design")] design: JsValue,
    #[wasm_bindgen(unchecked_param_type = "OptimumRequest")] request: JsValue,
) -> Result<JsValue, JsValue> {
    let design = from_js(design, "(document)")?;
    let request = from_js(request, "(request)")?;
    to_js(&optimum_value(design, request).map_err(|e| js_error(&e))?)
}

/// A one-dimensional sweep (`request.y` absent) or two-dimensional map of one output over
/// several designs, in one call. For long maps use `MapRun`.
#[wasm_bindgen(js_name = sweep, unchecked_return_type = "GridResult")]
pub fn sweep_js(
    #[wasm_bindgen(unchecked_param_type = "Design[]")] designs: JsValue,
    #[wasm_bindgen(unchecked_param_type = "GridRequest")] request: JsValue,
) -> Result<JsValue, JsValue> {
    let designs = from_js(designs, "designs")?;
    let request = from_js(request, "(request)")?;
    to_js(&sweep_value(designs, request).map_err(|e| js_error(&e))?)
}

/// Uncertainty bands on sigma_y(tau) and on every scalar of the table, in one call.
#[wasm_bindgen(js_name = bands, unchecked_return_type = "BandResult")]
pub fn bands_js(
    #[wasm_bindgen(unchecked_param_type = "Design")] design: JsValue,
    #[wasm_bindgen(unchecked_param_type = "BandRequest")] request: JsValue,
) -> Result<JsValue, JsValue> {
    let design = from_js(design, "(document)")?;
    let request = from_js(request, "(request)")?;
    to_js(&bands_value(design, request).map_err(|e| js_error(&e))?)
}

/// A sweep or map evaluated in chunks: `advance(n)` evaluates up to n more points and
/// returns the progress; `result()` once `finished`. Cancel by dropping it (`free()`).
#[wasm_bindgen(js_name = MapRun)]
pub struct MapRunJs {
    run: GridRun,
}

#[wasm_bindgen(js_class = MapRun)]
impl MapRunJs {
    /// Checks the request against the designs; throws an `Error` with `problems` if invalid.
    #[wasm_bindgen(constructor)]
    pub fn new(
        #[wasm_bindgen(unchecked_param_type = "Design[]")] designs: JsValue,
        #[wasm_bindgen(unchecked_param_type = "GridRequest")] request: JsValue,
    ) -> Result<MapRunJs, JsValue> {
        let designs = from_js(designs, "designs")?;
        let request = from_js(request, "(request)")?;
        Ok(MapRunJs { run: grid_run_value(designs, request).map_err(|e| js_error(&e))? })
    }

    /// Evaluates up to `max_points` more points.
    #[wasm_bindgen(unchecked_return_type = "Progress")]
    pub fn advance(&mut self, max_points: u32) -> Result<JsValue, JsValue> {
        to_js(&self.run.advance(max_points as usize))
    }

    /// Points in all.
    #[wasm_bindgen(getter)]
    pub fn total(&self) -> u32 {
        self.run.total() as u32
    }

    /// Points evaluated so far.
    #[wasm_bindgen(getter)]
    pub fn done(&self) -> u32 {
        self.run.done() as u32
    }

    #[wasm_bindgen(getter)]
    pub fn finished(&self) -> bool {
        self.run.is_finished()
    }

    /// The result; throws while points are left.
    #[wasm_bindgen(unchecked_return_type = "GridResult")]
    pub fn result(&self) -> Result<JsValue, JsValue> {
        to_js(&self.run.result().map_err(|e| js_error(&e))?)
    }
}

/// An uncertainty study evaluated in chunks, like `MapRun`.
#[wasm_bindgen(js_name = BandRun)]
pub struct BandRunJs {
    run: BandRun,
}

#[wasm_bindgen(js_class = BandRun)]
impl BandRunJs {
    #[wasm_bindgen(constructor)]
    pub fn new(
        #[wasm_bindgen(unchecked_param_type = "Design")] design: JsValue,
        #[wasm_bindgen(unchecked_param_type = "BandRequest")] request: JsValue,
    ) -> Result<BandRunJs, JsValue> {
        let design = from_js(design, "(document)")?;
        let request = from_js(request, "(request)")?;
        Ok(BandRunJs { run: band_run_value(design, request).map_err(|e| js_error(&e))? })
    }

    /// Evaluates up to `max_samples` more samples.
    #[wasm_bindgen(unchecked_return_type = "Progress")]
    pub fn advance(&mut self, max_samples: u32) -> Result<JsValue, JsValue> {
        to_js(&self.run.advance(max_samples as usize))
    }

    #[wasm_bindgen(getter)]
    pub fn total(&self) -> u32 {
        self.run.total() as u32
    }

    #[wasm_bindgen(getter)]
    pub fn finished(&self) -> bool {
        self.run.is_finished()
    }

    /// The bands; throws while samples are left.
    #[wasm_bindgen(unchecked_return_type = "BandResult")]
    pub fn result(&self) -> Result<JsValue, JsValue> {
        to_js(&self.run.result().map_err(|e| js_error(&e))?)
    }
}

/// TypeScript declarations of the study shapes (emitted into the generated .d.ts).
#[allow(dead_code)]
pub(crate) const TS_STUDY_SHAPES: &str = r#"
/** What a sweep or map shows. */
export type Output =
  | { kind: "sigma_at"; tau_s: number }
  | { kind: "sigma_1s_equivalent" }
  | { kind: "projection_1s" }
  | { kind: "dick_1s" }
  | { kind: "dick_share" }
  | { kind: "time_to_target"; target: number }
  | { kind: "probe_phase_rms_rad" }
  | { kind: "cycle_time_s" };

/** Optimum probe time: all fields but tau_s optional. */
export interface OptimumRequest {
  tau_s: number;
  probe_min_s?: number;
  probe_max_s?: number;
  respect_coherence?: boolean;
  attack_cycles?: number | null;
  max_rounds?: number | null;
}
export type ProbeShape = "ramsey_free_time" | "rabi_pulse_time";
export type RangeEnd = "requested" | "servo_attack_time" | "averaging_time" | "laser_coherence" | "segment_cap" | "cutoff_cap";
export type OptimumMechanism = "projection_noise" | "dead_time" | "laser_coherence" | "lifetime" | "dick_effect" | "laser_noise";
export interface RoundsBest { rounds: number; probe_time_s: number; sigma: number; }
export interface ScanPoint { probe_time_s: number; sigma: number | null; }
export interface Optimum {
  tau_s: number;
  probe_shape: ProbeShape;
  start_probe_time_s: number;
  probe_time_s: number;
  rounds: number;
  sigma: number;
  laser: number;
  projection: number;
  dick: number;
  range_s: [number, number];
  range_end: RangeEnd;
  at_range_end: boolean;
  mechanism: OptimumMechanism;
  explanation: string;
  cycle_time_s: number;
  probe_over_lifetime: number;
  probe_phase_rms_rad: number;
  coherence_probe_limit_s: number | null;
  per_rounds: RoundsBest[];
  scan: ScanPoint[];
  evaluations: number;
  design: Design;
}

export type Spacing = "linear" | "log";
/** One axis: a field path such as "sequence.segments[2].duration_s" and its values. */
export interface Axis { path: string; from: number; to: number; points: number; spacing?: Spacing; }
/** A sweep (no y) or a map (with y). */
export interface GridRequest { x: Axis; y?: Axis | null; output: Output; levels?: number[] | null; }
export interface Hole { index: number; reason: string; }
/** Contour segments [x0, y0, x1, y1] in axis units. */
export interface ContourLine { level: number; segments: [number, number, number, number][]; }
export interface GridSeries { design_name: string; values: (number | null)[]; holes: Hole[]; contours: ContourLine[]; }
export interface GridResult {
  x_path: string;
  x: number[];
  y_path: string | null;
  y: number[];
  output: Output;
  output_label: string;
  series: GridSeries[];
}
export interface Progress { done: number; total: number; finished: boolean; }

export type Distribution =
  | { kind: "uniform"; low: number; high: number }
  | { kind: "log_uniform"; low: number; high: number }
  | { kind: "normal"; mean: number; sd: number }
  | { kind: "log_normal"; median: number; sigma_ln: number };
export interface Uncertain { path: string; distribution: Distribution; }
export type Sampling = "latin_hypercube" | "monte_carlo";
export interface BandRequest {
  uncertain: Uncertain[];
  samples?: number;
  seed?: number;
  sampling?: Sampling;
  quantiles?: number[];
  options?: Partial<EvalOptions>;
}
export interface ScalarBand { name: string; nominal: number | null; values: (number | null)[]; not_finite: number; }
export interface BandResult {
  method: string;
  sampling: Sampling;
  samples: number;
  seed: number;
  quantiles: number[];
  tau_s: number[];
  nominal_curve: number[];
  curve: (number | null)[][];
  curve_samples: number[];
  scalars: ScalarBand[];
  failed: Hole[];
}
"#;

#[wasm_bindgen(typescript_custom_section)]
const TS_STUDY_SECTION: &'static str = TS_STUDY_SHAPES;

#[cfg(test)]
mod tests {
    use super::*;
    use serde_json::json;

    fn designs() -> Value {
        serde_json::to_value(clockwright_core::demo::designs()).unwrap()
    }

    use crate::shapes::assert_declared;

    #[test]
    fn sweep_forwards_to_core_unchanged_and_its_shape_is_declared() {
        let req = json!({"x": {"path": "atoms.count", "from": 1, "to": 4, "points": 4}, "output": {"kind": "sigma_at", "tau_s": 1000}});
        let via = sweep_value(designs(), req.clone()).unwrap();
        let direct = study::sweep(&clockwright_core::demo::designs(), &serde_json::from_value(req).unwrap()).unwrap();
        assert_eq!(via, direct);
        assert_declared(&serde_json::to_value(&via).unwrap());
        let map = json!({"x": {"path": "atoms.count", "from": 1, "to": 4, "points": 4}, "y": {"path": "lock.attack_time_s", "from": 4, "to": 8, "points": 3, "spacing": "log"}, "output": {"kind": "dick_share"}, "levels": [0.001]});
        let mut run = grid_run_value(json!([designs()[0].clone()]), map).unwrap();
        while !run.advance(5).finished {}
        assert_declared(&serde_json::to_value(run.result().unwrap()).unwrap());
    }

    #[test]
    fn optimum_and_bands_forward_and_their_shapes_are_declared() {
        let o = optimum_value(designs()[1].clone(), json!({"tau_s": 1000, "max_rounds": 2})).unwrap();
        assert_eq!(o.per_rounds.len(), 2);
        assert_declared(&serde_json::to_value(&o).unwrap());
        let b = bands_value(designs()[0].clone(), json!({"uncertain": [{"path": "atoms.count", "distribution": {"kind": "uniform", "low": 1, "high": 3}}], "samples": 8})).unwrap();
        assert_declared(&serde_json::to_value(&b).unwrap());
    }

    #[test]
    fn bad_requests_name_the_field() {
        let e = sweep_value(designs(), json!({"x": {"path": "atoms.count", "from": 1, "to": 4, "points": "many"}, "output": {"kind": "dick_share"}})).unwrap_err();
        assert_eq!(e.problems[0].path, "x.points", "{e}");
        let e = sweep_value(designs(), json!({"x": {"path": "atoms.count", "from": 1, "to": 4, "points": 3}, "output": {"kind": "sigma_at"}})).unwrap_err();
        assert!(e.problems[0].path.starts_with("output"), "{e}");
        let mut ds = designs();
        ds[2]["atoms"]["count"] = json!(-3);
        let e = sweep_value(ds, json!({"x": {"path": "atoms.count", "from": 1, "to": 4, "points": 3}, "output": {"kind": "dick_share"}})).unwrap_err();
        assert!(e.problems[0].path.starts_with("designs[2]."), "{e}");
        assert!(sweep_value(json!({"not": "a list"}), json!({})).is_err());
        let e = optimum_value(designs()[0].clone(), json!({"tau": 5})).unwrap_err();
        assert!(e.to_string().contains("tau"), "{e}");
        let e = bands_value(designs()[0].clone(), json!({"uncertain": [{"path": "atoms.count", "distribution": {"kind": "triangle"}}]})).unwrap_err();
        assert!(e.problems[0].path.starts_with("uncertain[0].distribution"), "{e}");
    }
}
