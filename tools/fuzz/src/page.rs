//! The page's entry points as the binding (wasm/src) calls them: the same core functions
//! on the same JSON values, options `null` meaning the defaults.
//!
//! Mirrored here rather than imported from `clockwright-wasm`: that crate is also a cdylib,
//! and a binary built with the release profile's `panic = "abort"` next to tests built with
//! unwinding makes cargo build it twice under one file name. The binding only converts and
//! forwards (its `*_value` functions in wasm/src are these same calls), so these few lines
//! are the whole of what it does between the page and the engine.

use clockwright_core::measured::{import_csv, MeasuredResult};
use clockwright_core::noise::SpectrumTable;
use clockwright_core::pair::{evaluate_pair, PairDocument, PairEvaluation};
use clockwright_core::study::{self, BandRun, GridRun, Optimum};
use clockwright_core::{Design, EvalOptions, Evaluation, InputError};
use serde::de::DeserializeOwned;
use serde_json::Value;

/// Options: `null` is the defaults, otherwise the object as the schema reads it.
fn options<T: DeserializeOwned + Default>(value: Value) -> Result<T, InputError> {
    if value.is_null() {
        return Ok(T::default());
    }
    serde_json::from_value(value).map_err(|e| InputError::single("options", "", format!("must be an object of the options (all optional): {e}")))
}

/// `evaluate(design, options)`.
pub fn evaluate_value(design: Value, opts: Value) -> Result<Evaluation, InputError> {
    let design = Design::from_value(design)?;
    let opts: EvalOptions = options(opts)?;
    clockwright_core::evaluate(&design, &opts)
}

/// `validate(design)`: every problem, empty when the design is fine.
pub fn validate_value(design: Value) -> Vec<clockwright_core::error::Problem> {
    match Design::from_value(design).and_then(|d| d.validate()) {
        Ok(()) => Vec::new(),
        Err(e) => e.problems,
    }
}

/// `parseSpectrumCsv(text)`.
pub fn parse_spectrum_csv(text: &str) -> Result<SpectrumTable, InputError> {
    SpectrumTable::from_csv(text)
}

/// `importMeasured(text, null)`.
pub fn import_measured_value(text: &str, opts: Value) -> Result<MeasuredResult, InputError> {
    let opts: clockwright_core::estimate::Options = options(opts)?;
    import_csv(text, &opts)
}

/// `evaluatePair(doc, null)`.
pub fn evaluate_pair_value(doc: Value, opts: Value) -> Result<PairEvaluation, InputError> {
    let doc = PairDocument::from_value(doc)?;
    let opts: clockwright_core::pair::PairOptions = options(opts)?;
    evaluate_pair(&doc, &opts)
}

/// `optimum(design, request)`.
pub fn optimum_value(design: Value, request: Value) -> Result<Optimum, InputError> {
    let design = Design::from_value(design)?;
    let request: study::OptimumRequest = study::from_value(request, "")?;
    study::optimum(&design, &request)
}

/// The worker's sweep and map job, prepared.
pub fn grid_run_value(designs: Value, request: Value) -> Result<GridRun, InputError> {
    let designs = study::designs_from_value(designs)?;
    let request: study::GridRequest = study::from_value(request, "")?;
    GridRun::new(&designs, &request)
}

/// The worker's bands job, prepared.
pub fn band_run_value(design: Value, request: Value) -> Result<BandRun, InputError> {
    let design = Design::from_value(design)?;
    let request: study::BandRequest = study::from_value(request, "")?;
    BandRun::new(&design, &request)
}
