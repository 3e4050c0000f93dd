//! Headless entry: evaluate a design file and print the whole result as JSON.
//!
//! ```text
//! cargo run --release -p clockwright-core --example evaluate -- design.json [options.json]
//! ```
//! `-` reads the design from standard input. Errors go to standard error, one problem a
//! line, and the exit code is 2.

use clockwright_core::{evaluate, Design, EvalOptions};
use std::io::Read;
use std::process::ExitCode;

fn read(path: &str) -> Result<String, String> {
    if path == "-" {
        let mut s = String::new();
        std::io::stdin().read_to_string(&mut s).map_err(|e| format!("standard input: {e}"))?;
        Ok(s)
    } else {
        std::fs::read_to_string(path).map_err(|e| format!("{path}: {e}"))
    }
}

fn run() -> Result<String, String> {
    let args: Vec<String> = std::env::args().skip(1).collect();
    let Some(path) = args.first() else {
        return Err("usage: evaluate <design.json | -> [options.json]".into());
    };
    let design = Design::from_json(&read(path)?).map_err(|e| e.to_string())?;
    let options: EvalOptions = match args.get(1) {
        Some(p) => serde_json::from_str(&read(p)?).map_err(|e| format!("{p}: {e}"))?,
        None => EvalOptions::default(),
    };
    let result = evaluate(&design, &options).map_err(|e| e.to_string())?;
    serde_json::to_string_pretty(&result).map_err(|e| e.to_string())
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
