//! Fuzzing of every entry point that takes outside input, on stable Rust: seeded mutation of
//! committed seed files (`tests/fuzz/corpus/<entry>/`) and schema-driven generation of
//! extreme designs. Each input runs under `catch_unwind`; it fails when it panics, when its
//! result holds a NaN or an infinity anywhere, when an error is not readable (no path or no
//! statement of what is allowed), or when it takes longer than [`TIME_LIMIT`]. Failing
//! inputs are written to `tests/fuzz/failures/` and replay with `--replay`.

pub mod entries;
pub use clockwright_core::finite;
pub mod mutate;
pub mod page;

use entries::{Entry, Outcome, Seeds};
use mutate::Rng;
use std::panic::{catch_unwind, AssertUnwindSafe};
use std::path::{Path, PathBuf};
use std::time::{Duration, Instant};

/// Longest time one input may take (release build, thread CPU time).
pub const TIME_LIMIT: Duration = Duration::from_millis(100);
/// Longest error text shown for one input, bytes (the page lists every problem).
pub const MAX_ERROR_BYTES: usize = 64 * 1024;

/// Why an input failed.
#[derive(Debug, Clone)]
pub enum Failure {
    Panic(String),
    NonFinite(Vec<String>),
    /// Took this long (the least of three runs), over this limit.
    Slow(Duration, Duration),
    UnreadableError(String),
}

impl std::fmt::Display for Failure {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            Failure::Panic(m) => write!(f, "panic: {m}"),
            Failure::NonFinite(p) => write!(f, "non-finite numbers in the result: {}", p.iter().take(8).cloned().collect::<Vec<_>>().join(", ")),
            Failure::Slow(d, limit) => write!(f, "took {:.1} ms (limit {} ms)", d.as_secs_f64() * 1e3, limit.as_millis()),
            Failure::UnreadableError(m) => write!(f, "unreadable error: {m}"),
        }
    }
}

/// The result of one input: accepted or refused, and its time; or its failure.
pub struct Checked {
    pub accepted: bool,
    /// Refused by the engine's last check, that no result number is NaN or infinite
    /// ([`clockwright_core::finite::require_finite`]): inputs whose numbers combine beyond
    /// double precision somewhere in the model.
    pub range_guard: bool,
    pub time: Duration,
    pub failure: Option<Failure>,
}

thread_local! {
    static PANIC_MESSAGE: std::cell::RefCell<Option<String>> = const { std::cell::RefCell::new(None) };
}

/// Keeps panic messages for the report instead of printing them (installed once).
pub fn quiet_panics() {
    std::panic::set_hook(Box::new(|info| {
        let msg = info.payload().downcast_ref::<&str>().map(|s| s.to_string()).or_else(|| info.payload().downcast_ref::<String>().cloned()).unwrap_or_else(|| "(no message)".into());
        let at = info.location().map(|l| format!(" at {}:{}", l.file(), l.line())).unwrap_or_default();
        PANIC_MESSAGE.with(|m| *m.borrow_mut() = Some(format!("{msg}{at}")));
    }));
}

/// CPU time of the calling thread: the work an input makes this thread do, unaffected by
/// other jobs sharing the machine (wall time is what a user waits, and equals it on an
/// idle machine).
pub fn thread_cpu_time() -> Duration {
    let mut ts = libc::timespec { tv_sec: 0, tv_nsec: 0 };
    // SAFETY: clock_gettime writes one timespec through a valid pointer.
    let rc = unsafe { libc::clock_gettime(libc::CLOCK_THREAD_CPUTIME_ID, &mut ts) };
    if rc != 0 {
        return Duration::ZERO;
    }
    Duration::new(ts.tv_sec as u64, ts.tv_nsec as u32)
}

/// Runs `f` and returns its thread CPU time.
fn timed<T>(f: impl FnOnce() -> T) -> (T, Duration) {
    let t0 = thread_cpu_time();
    let r = f();
    (r, thread_cpu_time().saturating_sub(t0))
}

/// Runs one input through one entry and checks it, [`TIME_LIMIT`] included.
pub fn check(entry: &Entry, input: &[u8]) -> Checked {
    check_within(entry, input, Some(TIME_LIMIT))
}

/// Runs one input through one entry and checks it; with `limit`, an input that takes
/// longer (the least of three runs) fails. Without, its time is only measured: the test
/// command's short pass and the tests check behaviour, not speed, which the long pass
/// (`./dev fuzz`, a benchmark on a quiet machine) judges.
pub fn check_within(entry: &Entry, input: &[u8], limit: Option<Duration>) -> Checked {
    let (r, time) = timed(|| catch_unwind(AssertUnwindSafe(|| (entry.run)(input))));
    let mut range_guard = false;
    let (accepted, mut failure) = match r {
        Err(_) => (false, Some(Failure::Panic(PANIC_MESSAGE.with(|m| m.borrow_mut().take()).unwrap_or_else(|| "(no message)".into())))),
        Ok(Outcome::Accepted(bad)) => (true, if bad.is_empty() { None } else { Some(Failure::NonFinite(bad)) }),
        Ok(Outcome::Refused(e)) => {
            range_guard = e.problems.iter().any(|p| p.path.starts_with("result.") && p.value.contains("out of the double-precision range"));
            (false, readable(&e))
        }
    };
    let mut time = time;
    if let Some(limit) = limit.filter(|&l| failure.is_none() && time > l) {
        // The machine is shared: an input is slow when two more runs are slow as well
        // (the least of three times counts, as benchmarks do).
        for _ in 0..2 {
            let (_, t) = timed(|| catch_unwind(AssertUnwindSafe(|| (entry.run)(input))));
            time = time.min(t);
        }
        if time > limit {
            failure = Some(Failure::Slow(time, limit));
        }
    }
    Checked { accepted, range_guard, time, failure }
}

/// An error is readable when it names at least one problem, each with a path and a
/// statement of what is allowed, and stays short enough to show.
pub fn readable(e: &clockwright_core::InputError) -> Option<Failure> {
    if e.problems.is_empty() {
        return Some(Failure::UnreadableError("an error without problems".into()));
    }
    for p in &e.problems {
        if p.path.trim().is_empty() || p.allowed.trim().is_empty() {
            return Some(Failure::UnreadableError(format!("a problem without path or allowed: {p}")));
        }
    }
    let len = e.to_string().len();
    if len > MAX_ERROR_BYTES {
        return Some(Failure::UnreadableError(format!("{} problems in {len} bytes of text (at most {MAX_ERROR_BYTES})", e.problems.len())));
    }
    None
}

/// The seed files of one entry (sorted by name, so runs repeat exactly).
pub fn load_seeds(corpus: &Path, entry: &Entry) -> std::io::Result<Seeds> {
    let dir = corpus.join(entry.name);
    let mut files: Vec<PathBuf> = match std::fs::read_dir(&dir) {
        Ok(rd) => rd.filter_map(|e| e.ok().map(|e| e.path())).filter(|p| p.is_file()).collect(),
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => Vec::new(),
        Err(e) => return Err(e),
    };
    files.sort();
    let mut bytes = Vec::new();
    for f in &files {
        bytes.push(std::fs::read(f)?);
    }
    let json = bytes.iter().filter_map(|b| serde_json::from_slice(b).ok()).collect();
    if bytes.is_empty() {
        bytes.push(Vec::new());
    }
    Ok(Seeds { bytes, json })
}

/// Figures of one pass over one entry.
#[derive(Debug, Default, Clone)]
pub struct Stats {
    pub inputs: u64,
    pub accepted: u64,
    pub refused: u64,
    /// Refused inputs that only the final range check caught (see [`Checked::range_guard`]).
    pub range_guard: u64,
    pub failures: u64,
    pub total: Duration,
    pub slowest: Duration,
    pub slowest_input: Vec<u8>,
    /// First failures found (input, why), at most 20 kept.
    pub found: Vec<(Vec<u8>, Failure)>,
}

/// How one pass runs.
pub struct Plan<'a> {
    /// Seed of the generator (combined with the entry's name).
    pub seed: u64,
    /// Inputs per entry.
    pub inputs: u64,
    /// Wall time per entry, if any: the pass ends at whichever comes first.
    pub budget: Option<Duration>,
    /// A line of figures every minute.
    pub progress: bool,
    /// Where failing inputs are written.
    pub failures: &'a Path,
    /// Longest CPU time of one input ([`check_within`]); `None` measures only.
    pub limit: Option<Duration>,
}

/// Runs `plan.inputs` inputs (or until `plan.budget` has passed) through one entry: the
/// seeds themselves first, then mutations from the seeded generator. The first 20 failing
/// inputs are written to `plan.failures` as they are found (a long pass stopped early keeps
/// them) and named on standard output.
pub fn pass(entry: &Entry, seeds: &Seeds, plan: &Plan) -> Stats {
    let Plan { seed, inputs, budget, progress, failures, limit } = *plan;
    let mut rng = Rng::new(seed ^ fnv(entry.name.as_bytes()));
    let mut s = Stats::default();
    let start = Instant::now();
    let mut report = start;
    let mut k = 0u64;
    while k < inputs {
        if progress && report.elapsed() >= Duration::from_secs(60) {
            report = Instant::now();
            println!(
                "  {} so far: {} inputs ({} accepted, {} refused, {} failed), {:.0} inputs per CPU second, slowest {:.2} ms, {:.0} s",
                entry.name,
                s.inputs,
                s.accepted,
                s.refused,
                s.failures,
                s.inputs as f64 / s.total.as_secs_f64().max(1e-9),
                s.slowest.as_secs_f64() * 1e3,
                start.elapsed().as_secs_f64()
            );
            use std::io::Write;
            let _ = std::io::stdout().flush();
        }
        if let Some(b) = budget {
            if start.elapsed() > b {
                break;
            }
        }
        let input = if (k as usize) < seeds.bytes.len() && !seeds.bytes[k as usize].is_empty() { seeds.bytes[k as usize].clone() } else {
            let mut b = (entry.make)(&mut rng, seeds);
            // Larger files are refused by the page before they are read: cut to the cap.
            b.truncate(entry.max_bytes);
            b
        };
        let c = check_within(entry, &input, limit);
        s.inputs += 1;
        s.total += c.time;
        s.range_guard += c.range_guard as u64;
        if c.time > s.slowest {
            s.slowest = c.time;
            s.slowest_input = input.clone();
        }
        match c.failure {
            Some(f) => {
                s.failures += 1;
                if s.found.len() < 20 {
                    match write_failure(failures, entry, &input, &f) {
                        Ok(file) => println!("    FAILED {}: {f}", file.display()),
                        Err(e) => println!("    FAILED (not written: {e}): {f}"),
                    }
                    use std::io::Write;
                    let _ = std::io::stdout().flush();
                    s.found.push((input, f));
                }
            }
            None if c.accepted => s.accepted += 1,
            None => s.refused += 1,
        }
        k += 1;
    }
    s
}

/// FNV-1a, for seeds from names and for failure file names.
pub fn fnv(b: &[u8]) -> u64 {
    let mut h = 0xcbf2_9ce4_8422_2325u64;
    for &x in b {
        h ^= x as u64;
        h = h.wrapping_mul(0x0100_0000_01b3);
    }
    h
}

/// Writes a failing input and a note of why beside it; returns the input's file.
pub fn write_failure(dir: &Path, entry: &Entry, input: &[u8], why: &Failure) -> std::io::Result<PathBuf> {
    std::fs::create_dir_all(dir)?;
    let f = dir.join(format!("{}-{:016x}.{}", entry.name, fnv(input), entry.ext));
    std::fs::write(&f, input)?;
    let mut note = f.clone().into_os_string();
    note.push(".why.txt");
    std::fs::write(
        PathBuf::from(note),
        format!("{why}\n\nreplay: cargo run --profile fuzz -p clockwright-fuzz -- --replay {} {}\n", entry.name, f.display()),
    )?;
    Ok(f)
}
