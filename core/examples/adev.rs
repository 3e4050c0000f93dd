//! Headless entry: the overlapping Allan, modified Allan and overlapping Hadamard deviations
//! of a one-column file of fractional-frequency values, printed as JSON.
//!
//! ```text
//! cargo run --release -p clockwright-core --example adev -- y.txt TAU0_S [options.json] [--only-allan]
//! ```
//! One value a line (`NaN` marks a gap; blank lines and lines starting with `#` are ignored).
//! `options.json` holds `estimate::Options` (default: octave taus, 68.3 % intervals,
//! identified noise). The JSON has one `estimate::Estimate` per estimator and `seconds`, the
//! time each took, measured around the computation only (file reading and printing excluded).
//! `--only-allan` computes the Allan deviation alone (for the benchmark). Errors go to
//! standard error and the exit code is 2.

use clockwright_core::estimate::{estimate, Estimator, Options, Series};
use std::process::ExitCode;
use std::time::Instant;

fn read_column(path: &str) -> Result<Vec<f64>, String> {
    let text = std::fs::read_to_string(path).map_err(|e| format!("{path}: {e}"))?;
    let mut v = Vec::new();
    for (i, line) in text.lines().enumerate() {
        let t = line.trim();
        if t.is_empty() || t.starts_with('#') {
            continue;
        }
        let x: f64 = t.parse().map_err(|_| format!("{path}: line {}: {t:?} is not a number", i + 1))?;
        v.push(x);
    }
    Ok(v)
}

fn run() -> Result<String, String> {
    let mut args: Vec<String> = std::env::args().skip(1).collect();
    let only_allan = args.iter().any(|a| a == "--only-allan");
    args.retain(|a| a != "--only-allan");
    let (Some(path), Some(tau0)) = (args.first(), args.get(1)) else {
        return Err("usage: adev <y.txt> <tau0_s> [options.json] [--only-allan]".into());
    };
    let tau0: f64 = tau0.parse().map_err(|_| format!("tau0_s: {tau0:?} is not a number"))?;
    let options: Options = match args.get(2) {
        Some(p) => {
            let text = std::fs::read_to_string(p).map_err(|e| format!("{p}: {e}"))?;
            serde_json::from_str(&text).map_err(|e| format!("{p}: {e}"))?
        }
        None => Options::default(),
    };
    let y = read_column(path)?;
    let which: &[(&str, Estimator)] = if only_allan {
        &[("allan", Estimator::Allan)]
    } else {
        &[("allan", Estimator::Allan), ("modified_allan", Estimator::ModifiedAllan), ("hadamard", Estimator::Hadamard)]
    };
    let mut out = serde_json::Map::new();
    let mut seconds = serde_json::Map::new();
    for (name, est) in which {
        let t = Instant::now();
        let e = estimate(Series::Frequency(&y), tau0, *est, &options).map_err(|e| e.to_string())?;
        seconds.insert(name.to_string(), serde_json::json!(t.elapsed().as_secs_f64()));
        out.insert(name.to_string(), serde_json::to_value(&e).map_err(|e| e.to_string())?);
    }
    out.insert("seconds".into(), serde_json::Value::Object(seconds));
    serde_json::to_string(&out).map_err(|e| e.to_string())
}

fn main() -> ExitCode {
    match run() {
        Ok(json) => {
            println!("{json}");
            ExitCode::SUCCESS
        }
        Err(e) => {
            eprintln!("{e}");
            ExitCode::from(2)
        }
    }
}
