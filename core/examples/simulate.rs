//! Headless entry: simulate a design cycle by cycle and print a table of the simulated
//! and analytic Allan deviations (or the whole result as JSON with `--json`).
//!
//! ```text
//! cargo run --release -p clockwright-core --example simulate -- design.json ['{"cycles":100000}'] [--json]
//! ```
//! Errors go to standard error, one problem a line, and the exit code is 2.

use clockwright_core::simulate::{simulate, SimOptions};
use clockwright_core::Design;
use std::process::ExitCode;

fn run() -> Result<String, String> {
    let args: Vec<String> = std::env::args().skip(1).filter(|a| a != "--json").collect();
    let json = std::env::args().any(|a| a == "--json");
    let Some(path) = args.first() else {
        return Err("usage: simulate <design.json> [options JSON] [--json]".into());
    };
    let text = std::fs::read_to_string(path).map_err(|e| format!("{path}: {e}"))?;
    let design = Design::from_json(&text).map_err(|e| e.to_string())?;
    let options: SimOptions = match args.get(1) {
        Some(o) => serde_json::from_str(o).map_err(|e| format!("options: {e}"))?,
        None => SimOptions::default(),
    };
    let r = simulate(&design, &options).map_err(|e| e.to_string())?;
    if json {
        return serde_json::to_string_pretty(&r).map_err(|e| e.to_string());
    }
    let mut out = format!("{}: {} cycles of {} s after {} settling\n", r.design_name, r.cycles, r.cycle_time_s, r.settle_cycles);
    out += "      tau_s   simulated    ci_low     ci_high    analytic  free_sim   free_analytic\n";
    for (k, p) in r.locked.points.iter().enumerate() {
        let j = 63 - p.m.leading_zeros() as usize;
        let a = r.analytic.total.get(j).copied().unwrap_or(f64::NAN);
        let fa = r.analytic.free_laser.get(j).copied().unwrap_or(f64::NAN);
        let fs = r.free_laser.points.get(k).map(|q| q.deviation).unwrap_or(f64::NAN);
        let flag = if r.departures.iter().any(|d| d.tau_s == p.tau_s) { " *" } else { "" };
        out += &format!("{:>11.4e} {:>10.3e} {:>10.3e} {:>10.3e} {:>10.3e} {:>10.3e} {:>10.3e}{flag}\n", p.tau_s, p.deviation, p.ci_low, p.ci_high, a, fs, fa);
    }
    out += &format!("fringe: {:?}\nnoise: {:?}\n", r.fringe, r.noise);
    for n in &r.notes {
        out += &format!("note: {n}\n");
    }
    Ok(out)
}

fn main() -> ExitCode {
    match run() {
        Ok(s) => {
            println!("{s}");
            ExitCode::SUCCESS
        }
        Err(e) => {
            eprintln!("{e}");
            ExitCode::from(2)
        }
    }
}
