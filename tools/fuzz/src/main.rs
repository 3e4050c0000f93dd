//! `clockwright-fuzz`: the fuzz passes of `./dev test` (short) and `./dev fuzz` (long).
//!
//! ```text
//! clockwright-fuzz [--inputs N] [--seconds S] [--seed X] [--entry NAME]... [--root DIR] [--time-limit MS | --no-time-limit]
//! clockwright-fuzz --replay ENTRY FILE...
//! ```
//! `--inputs` is per entry (default 1e6); `--seconds` caps each entry's time;
//! `--time-limit MS` fails inputs slower than MS milliseconds of CPU time (default 100);
//! `--no-time-limit` measures each input's time without failing slow ones (the test
//! command's short pass: behaviour is tested, speed is judged by the long pass). Prints per
//! entry the inputs, accepted and refused counts, inputs per second and the slowest input;
//! exits 1 when any input failed (written to tests/fuzz/failures/).

use clockwright_fuzz::entries::{entry, ENTRIES};
use clockwright_fuzz::{check, load_seeds, pass, quiet_panics, Plan};
use std::path::PathBuf;
use std::process::ExitCode;
use std::time::Duration;

fn main() -> ExitCode {
    let args: Vec<String> = std::env::args().skip(1).collect();
    match run(&args) {
        Ok(code) => code,
        Err(e) => {
            eprintln!("clockwright-fuzz: {e}");
            ExitCode::from(2)
        }
    }
}

fn run(args: &[String]) -> Result<ExitCode, String> {
    let mut inputs: u64 = 1_000_000;
    let mut seconds: Option<f64> = None;
    let mut seed: u64 = 1;
    let mut names: Vec<String> = Vec::new();
    let mut limit = Some(clockwright_fuzz::TIME_LIMIT);
    let mut root = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../..");
    let mut i = 0;
    let num = |i: usize, what: &str| -> Result<f64, String> {
        let v = args.get(i + 1).ok_or(format!("{what} needs a value"))?;
        v.parse::<f64>().ok().filter(|x| x.is_finite() && *x >= 0.0).ok_or(format!("{what}: {v} is not a number >= 0"))
    };
    quiet_panics();
    while i < args.len() {
        match args[i].as_str() {
            "--inputs" => {
                inputs = num(i, "--inputs")? as u64;
                i += 2;
            }
            "--seconds" => {
                seconds = Some(num(i, "--seconds")?);
                i += 2;
            }
            "--seed" => {
                seed = num(i, "--seed")? as u64;
                i += 2;
            }
            "--entry" => {
                names.push(args.get(i + 1).ok_or("--entry needs a name")?.clone());
                i += 2;
            }
            "--no-time-limit" => {
                limit = None;
                i += 1;
            }
            "--time-limit" => {
                limit = Some(Duration::from_secs_f64(num(i, "--time-limit")? / 1e3));
                i += 2;
            }
            "--root" => {
                root = PathBuf::from(args.get(i + 1).ok_or("--root needs a directory")?);
                i += 2;
            }
            "--replay" => return replay(&args[i + 1..]),
            "-h" | "--help" => {
                println!("clockwright-fuzz [--inputs N] [--seconds S] [--seed X] [--entry NAME]... [--root DIR] [--time-limit MS | --no-time-limit]\nclockwright-fuzz --replay ENTRY FILE...\nentries: {}", ENTRIES.iter().map(|e| e.name).collect::<Vec<_>>().join(", "));
                return Ok(ExitCode::SUCCESS);
            }
            other => return Err(format!("unknown argument {other} (try --help)")),
        }
    }
    let chosen: Vec<_> = if names.is_empty() { ENTRIES.iter().collect() } else { names.iter().map(|n| entry(n).ok_or(format!("no entry named {n}"))).collect::<Result<_, _>>()? };
    let corpus = root.join("tests/fuzz/corpus");
    let failures = root.join("tests/fuzz/failures");
    println!("{:<13} {:>9} {:>9} {:>9} {:>7} {:>6} {:>9} {:>10}  slowest input", "entry", "inputs", "accepted", "refused", "(range)", "failed", "inputs/s", "slowest");
    let mut failed = 0;
    for e in chosen {
        let seeds = load_seeds(&corpus, e).map_err(|x| format!("reading the corpus of {}: {x}", e.name))?;
        let plan = Plan { seed, inputs, budget: seconds.map(Duration::from_secs_f64), progress: seconds.is_none(), failures: &failures, limit };
        let s = pass(e, &seeds, &plan);
        let rate = s.inputs as f64 / s.total.as_secs_f64().max(1e-9);
        let slow_file = if s.slowest_input.is_empty() { String::new() } else { format!("{} bytes", s.slowest_input.len()) };
        println!(
            "{:<13} {:>9} {:>9} {:>9} {:>7} {:>6} {:>9.0} {:>8.2}ms  {}",
            e.name, s.inputs, s.accepted, s.refused, s.range_guard, s.failures, rate, s.slowest.as_secs_f64() * 1e3, slow_file
        );
        failed += s.failures;
    }
    Ok(if failed == 0 { ExitCode::SUCCESS } else { ExitCode::FAILURE })
}

fn replay(args: &[String]) -> Result<ExitCode, String> {
    let name = args.first().ok_or("--replay needs an entry and files")?;
    let e = entry(name).ok_or(format!("no entry named {name}"))?;
    let mut bad = false;
    for f in &args[1..] {
        let input = std::fs::read(f).map_err(|x| format!("{f}: {x}"))?;
        let c = check(e, &input);
        let verdict = match &c.failure {
            Some(why) => {
                bad = true;
                format!("FAILED: {why}")
            }
            None if c.accepted => "accepted".into(),
            None => {
                let msg = match (e.run)(&input) {
                    clockwright_fuzz::entries::Outcome::Refused(err) => err.to_string().lines().next().unwrap_or("").to_string(),
                    _ => String::new(),
                };
                format!("refused ({msg})")
            }
        };
        println!("{f}: {verdict}, {:.2} ms", c.time.as_secs_f64() * 1e3);
    }
    Ok(if bad { ExitCode::FAILURE } else { ExitCode::SUCCESS })
}
