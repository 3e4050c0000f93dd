//! pagebuild: builds the Clockwright page and the ES module package.
//!
//! Steps: (1) the wasm binding for wasm32-unknown-unknown in release, (2) wasm-bindgen
//! (target `web`) through wasm-bindgen-cli-support, pinned to the runtime's exact version,
//! (3) wasm-opt from the locked npm `binaryen` package, (4) type check and bundle of the page
//! with the locked npm `typescript` and `esbuild`, (5) one self-contained HTML file
//! `www/dist/clockwright.html` (script, style and wasm inlined, a Content-Security-Policy
//! that forbids all network access) and the package `www/dist/pkg/`.
//!
//! Usage: pagebuild [--serve] [--port N] [--open] [--skip-typecheck]


use anyhow::{anyhow, bail, Context, Result};
use std::fs;
use std::io::{BufRead, BufReader, Read, Write};
use std::net::{TcpListener, TcpStream};
use std::path::{Component, Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::Instant;

const WASM_TARGET: &str = "wasm32-unknown-unknown";
const STEM: &str = "clockwright_wasm";
/// Size the single-file page should stay within, bytes.
/// The single HTML file at most 600 kB (decimal kilobytes, as the figure is reported).
const PAGE_SIZE_TARGET: usize = 600_000;
const DEFAULT_PORT: u16 = 8631;

struct Args {
    serve: bool,
    open: bool,
    port: u16,
    typecheck: bool,
}

fn parse_args() -> Result<Args> {
    let mut args = Args { serve: false, open: false, port: DEFAULT_PORT, typecheck: true };
    let mut it = std::env::args().skip(1);
    while let Some(a) = it.next() {
        match a.as_str() {
            "--serve" => args.serve = true,
            "--open" => args.open = true,
            "--skip-typecheck" => args.typecheck = false,
            "--port" => {
                let v = it.next().ok_or_else(|| anyhow!("--port needs a number"))?;
                args.port = v.parse().map_err(|_| anyhow!("--port: {v:?} is not a port number (1 to 65535)"))?;
            }
            "-h" | "--help" => {
                println!("usage: pagebuild [--serve] [--port N] [--open] [--skip-typecheck]");
                println!("  builds www/dist/clockwright.html and www/dist/pkg/");
                println!("  --serve   then serve www/dist on 127.0.0.1 (default port {DEFAULT_PORT})");
                println!("  --open    then open the page with xdg-open, or print its path");
                std::process::exit(0);
            }
            other => bail!("unknown argument {other:?}; see --help"),
        }
    }
    Ok(args)
}

fn main() {
    if let Err(e) = run() {
        eprintln!("pagebuild: error: {e:#}");
        std::process::exit(1);
    }
}

fn run() -> Result<()> {
    let args = parse_args()?;
    let root = repo_root()?;
    let started = Instant::now();
    check_version_pins(&root)?;
    let node_bin = root.join("node_modules/.bin");
    if !node_bin.join("esbuild").exists() || !node_bin.join("wasm-opt").exists() {
        bail!("the npm tools are missing ({}): run `npm ci` in {} (./dev page does it for you)", node_bin.display(), root.display());
    }

    ensure_wasm_target()?;
    step("cargo build (wasm32, profile wasm: release optimised for size)");
    run_cmd(Command::new(cargo()).current_dir(&root).args(["build", "--profile", "wasm", "--target", WASM_TARGET, "-p", "clockwright-wasm"]))?;
    let target_dir = target_dir(&root)?;
    let wasm_in = target_dir.join(WASM_TARGET).join("wasm").join(format!("{STEM}.wasm"));

    step("wasm-bindgen (target web)");
    let work = target_dir.join("pagebuild");
    let bindgen_dir = work.join("bindgen");
    reset_dir(&bindgen_dir)?;
    wasm_bindgen_cli_support::Bindgen::new()
        .input_path(&wasm_in)
        .out_name(STEM)
        .web(true)?
        .typescript(true)
        .remove_name_section(true)
        .remove_producers_section(true)
        .generate(&bindgen_dir)
        .with_context(|| format!("wasm-bindgen on {}", wasm_in.display()))?;

    step("wasm-opt");
    let wasm_bg = bindgen_dir.join(format!("{STEM}_bg.wasm"));
    let before = fs::metadata(&wasm_bg)?.len();
    let optimised = work.join(format!("{STEM}_bg.opt.wasm"));
    run_cmd(Command::new(node_bin.join("wasm-opt")).args([
        wasm_bg.as_os_str(),
        "-O3".as_ref(),
        "--enable-bulk-memory".as_ref(),
        "--enable-mutable-globals".as_ref(),
        "--enable-nontrapping-float-to-int".as_ref(),
        "--enable-sign-ext".as_ref(),
        "--enable-reference-types".as_ref(),
        "--enable-multivalue".as_ref(),
        "--strip-debug".as_ref(),
        "--strip-producers".as_ref(),
        "-o".as_ref(),
        optimised.as_os_str(),
    ]))?;
    fs::rename(&optimised, &wasm_bg)?;
    println!("  wasm: {} -> {}", kb(before as usize), kb(fs::metadata(&wasm_bg)?.len() as usize));

    step("package www/dist/pkg");
    let dist = root.join("www/dist");
    reset_dir(&dist)?;
    let pkg = dist.join("pkg");
    fs::create_dir_all(&pkg)?;
    for name in [format!("{STEM}.js"), format!("{STEM}.d.ts"), format!("{STEM}_bg.wasm"), format!("{STEM}_bg.wasm.d.ts")] {
        fs::copy(bindgen_dir.join(&name), pkg.join(&name)).with_context(|| format!("copying {name}"))?;
    }
    fs::write(pkg.join("clockwright.js"), PACKAGE_ENTRY)?;
    fs::write(pkg.join("clockwright.d.ts"), PACKAGE_ENTRY_TYPES)?;
    fs::write(pkg.join("package.json"), package_json())?;

    if args.typecheck {
        step("type check (tsc)");
        run_cmd(Command::new(node_bin.join("tsc")).current_dir(&root).args(["-p", "www/tsconfig.json"]))?;
    }

    step("bundle (esbuild)");
    let page_dir = work.join("page");
    reset_dir(&page_dir)?;
    let js_out = page_dir.join("main.js");
    let css_out = page_dir.join("style.css");
    bundle_script(&node_bin, &root, "www/src/main.ts", "esm", "warning", &js_out)?;
    // The bootstrap, the page's only inline script: it inflates the program above from its
    // data block and starts it from a blob: URL.
    let boot_out = page_dir.join("boot.js");
    bundle_script(&node_bin, &root, "www/src/boot.ts", "esm", "warning", &boot_out)?;
    // The background worker: a classic script (started from a blob: URL by the page).
    let worker_out = page_dir.join("worker.js");
    // The wasm-bindgen glue mentions import.meta.url for fetching the module, which an
    // IIFE lacks; the worker is always handed the module, so that warning is silenced.
    bundle_script(&node_bin, &root, "www/src/worker.ts", "iife", "error", &worker_out)?;
    run_cmd(Command::new(node_bin.join("esbuild")).current_dir(&root).args([
        "www/src/style.css".to_string(),
        "--bundle".into(),
        "--minify".into(),
        "--charset=utf8".into(),
        "--log-level=warning".into(),
        format!("--outfile={}", css_out.display()),
    ]))?;

    step("single-file page");
    let template = fs::read_to_string(root.join("www/index.html")).context("reading www/index.html")?;
    let boot = fs::read_to_string(&boot_out)?;
    // The page's program is only ever read as data by the bootstrap, so it travels compressed
    // like the module and the worker: 200 kB of minified script take about 70 kB.
    let program = fs::read_to_string(&js_out)?;
    let program_block = base85(&zlib(program.trim_end().as_bytes())?);
    println!("  page program: {} ({} compressed, in base 85)", kb(program.len()), kb(program_block.len()));
    let style = fs::read_to_string(&css_out)?;
    // The module is compressed (zlib, undone in the page by DecompressionStream) and written in base 85.
    let wasm_bytes = fs::read(pkg.join(format!("{STEM}_bg.wasm")))?;
    let packed = Instant::now();
    let wasm_base64 = base85(&zlib(&wasm_bytes)?);
    println!("  inlined module: {} compressed to {} in base 85 ({:.1} s)", kb(wasm_bytes.len()), kb(wasm_base64.len()), packed.elapsed().as_secs_f64());
    // The worker's script is compressed the same way: it is only ever read as data (and started
    // from a blob: URL), and compressed it takes a third of the room base64 took, which keeps
    // the page under its size target as the page's own script grows.
    let worker = fs::read_to_string(&worker_out)?;
    let worker_base64 = base85(&zlib(worker.trim_end().as_bytes())?);
    println!("  worker script: {} ({} compressed, in base 85)", kb(worker.len()), kb(worker_base64.len()));
    let html = assemble_page(&template, boot.trim_end(), style.trim_end(), &Blocks { wasm: &wasm_base64, worker: &worker_base64, program: &program_block })?;
    let page = dist.join("clockwright.html");
    fs::write(&page, &html)?;
    let size = html.len();
    println!("  {}: {}", page.strip_prefix(&root).unwrap_or(&page).display(), kb(size));
    if size > PAGE_SIZE_TARGET {
        println!("  warning: the page is above the {} size target", kb(PAGE_SIZE_TARGET));
    }
    println!("pagebuild: done in {:.1} s", started.elapsed().as_secs_f64());

    if args.open {
        open_page(&page);
    }
    if args.serve {
        serve(&dist, args.port)?;
    }
    Ok(())
}

/// zlib data (RFC 1950) from the exhaustive deflate encoder of the `zopfli` crate: about 4 %
/// smaller than miniz_oxide at its best level (the module: about 291 against 304 kB compressed),
/// for some seconds of build time.
fn zlib(data: &[u8]) -> Result<Vec<u8>> {
    let mut out = Vec::with_capacity(data.len() / 2);
    zopfli::compress(zopfli::Options::default(), zopfli::Format::Zlib, data, &mut out).context("compressing a data block")?;
    Ok(out)
}

fn step(what: &str) {
    println!("pagebuild: {what}");
}

fn kb(n: usize) -> String {
    format!("{:.1} kB", n as f64 / 1000.0)
}

fn cargo() -> String {
    std::env::var("CARGO").unwrap_or_else(|_| "cargo".into())
}

fn repo_root() -> Result<PathBuf> {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("../..");
    root.canonicalize().with_context(|| format!("finding the repository root from {}", root.display()))
}

fn run_cmd(cmd: &mut Command) -> Result<()> {
    let shown = format!("{cmd:?}");
    let status = cmd.stdin(Stdio::null()).status().with_context(|| format!("starting {shown}"))?;
    if !status.success() {
        bail!("{shown} failed ({status})");
    }
    Ok(())
}

fn reset_dir(dir: &Path) -> Result<()> {
    if dir.exists() {
        fs::remove_dir_all(dir).with_context(|| format!("removing {}", dir.display()))?;
    }
    fs::create_dir_all(dir).with_context(|| format!("creating {}", dir.display()))
}

/// The `=x.y.z` pin of a dependency in a Cargo.toml, as written.
fn pin_of(manifest: &str, dep: &str) -> Option<String> {
    manifest.lines().map(str::trim).find_map(|l| {
        let rest = l.strip_prefix(dep)?.trim_start().strip_prefix('=')?.trim();
        let v = rest.strip_prefix('"')?.split('"').next()?;
        Some(v.to_string())
    })
}

fn check_version_pins(root: &Path) -> Result<()> {
    let runtime = fs::read_to_string(root.join("wasm/Cargo.toml"))?;
    let tool = fs::read_to_string(root.join("tools/pagebuild/Cargo.toml"))?;
    let a = pin_of(&runtime, "wasm-bindgen").ok_or_else(|| anyhow!("wasm/Cargo.toml must pin wasm-bindgen with \"=x.y.z\""))?;
    let b = pin_of(&tool, "wasm-bindgen-cli-support").ok_or_else(|| anyhow!("tools/pagebuild/Cargo.toml must pin wasm-bindgen-cli-support with \"=x.y.z\""))?;
    if a != b || !a.starts_with('=') {
        bail!("wasm-bindgen ({a}) in wasm/Cargo.toml and wasm-bindgen-cli-support ({b}) in tools/pagebuild/Cargo.toml must be pinned to the same exact version");
    }
    Ok(())
}

fn ensure_wasm_target() -> Result<()> {
    let listed = Command::new("rustup").args(["target", "list", "--installed"]).stderr(Stdio::null()).output();
    let Ok(out) = listed else {
        // No rustup: the toolchain manages its targets itself; let cargo report a missing one.
        return Ok(());
    };
    if String::from_utf8_lossy(&out.stdout).lines().any(|l| l.trim() == WASM_TARGET) {
        return Ok(());
    }
    step(&format!("adding the {WASM_TARGET} target (rustup target add {WASM_TARGET})"));
    let ok = Command::new("rustup").args(["target", "add", WASM_TARGET]).status().map(|s| s.success()).unwrap_or(false);
    if !ok {
        bail!(
            "the Rust target {WASM_TARGET} is not installed and `rustup target add {WASM_TARGET}` failed.\n\
             Install it by hand (rustup target add {WASM_TARGET}, or your distribution's rust-std \
             package for {WASM_TARGET}) and run the build again."
        );
    }
    Ok(())
}

fn target_dir(root: &Path) -> Result<PathBuf> {
    let out = Command::new(cargo())
        .current_dir(root)
        .args(["metadata", "--format-version", "1", "--no-deps"])
        .stderr(Stdio::inherit())
        .output()
        .context("running cargo metadata")?;
    if !out.status.success() {
        bail!("cargo metadata failed");
    }
    let meta: serde_json::Value = serde_json::from_slice(&out.stdout).context("reading cargo metadata")?;
    let dir = meta["target_directory"].as_str().ok_or_else(|| anyhow!("cargo metadata gave no target_directory"))?;
    Ok(PathBuf::from(dir))
}

/// Fills `{{csp}}`, `{{style}}`, `{{script}}`, `{{wasm}}` (the compressed module in base 85, for
/// a non-executed data block) and `{{worker}}` (the background worker's script, compressed, in
/// base 85, also a data block: the page starts it from a blob: URL) in one pass, so inserted text is never
/// rescanned, and computes the Content-Security-Policy from the exact inline script and style.
/// Bundles and minifies one script of the page with esbuild (`format`: esm or iife).
fn bundle_script(node_bin: &Path, root: &Path, entry: &str, format: &str, log_level: &str, out: &Path) -> Result<()> {
    run_cmd(Command::new(node_bin.join("esbuild")).current_dir(root).args([
        entry.to_string(),
        "--bundle".into(),
        format!("--format={format}"),
        "--platform=browser".into(),
        "--target=es2020".into(),
        "--minify".into(),
        "--legal-comments=none".into(),
        "--charset=utf8".into(),
        format!("--log-level={log_level}"),
        format!("--outfile={}", out.display()),
    ]))
}

/// The page's data blocks, each compressed and in base 85 (never holding "</script").
struct Blocks<'a> {
    wasm: &'a str,
    worker: &'a str,
    program: &'a str,
}

fn assemble_page(template: &str, script: &str, style: &str, blocks: &Blocks) -> Result<String> {
    if script.to_ascii_lowercase().contains("</script") {
        bail!("the bundled script contains \"</script\" and cannot be inlined");
    }
    if style.to_ascii_lowercase().contains("</style") {
        bail!("the bundled style contains \"</style\" and cannot be inlined");
    }
    let csp = content_security_policy(script, style);
    let mut out = String::with_capacity(template.len() + script.len() + style.len() + csp.len() + blocks.wasm.len() + blocks.worker.len() + blocks.program.len());
    let mut rest = template;
    let mut seen = Vec::new();
    while let Some(start) = rest.find("{{") {
        let end = rest[start..].find("}}").ok_or_else(|| anyhow!("www/index.html: unclosed {{{{"))? + start;
        let key = &rest[start + 2..end];
        out.push_str(&rest[..start]);
        out.push_str(match key {
            "csp" => &csp,
            "style" => style,
            "script" => script,
            "wasm" => blocks.wasm,
            "worker" => blocks.worker,
            "program" => blocks.program,
            other => bail!("www/index.html: unknown placeholder {{{{{other}}}}}"),
        });
        seen.push(key.to_string());
        rest = &rest[end + 2..];
    }
    out.push_str(rest);
    for key in ["csp", "style", "script", "wasm", "worker", "program"] {
        if seen.iter().filter(|k| *k == key).count() != 1 {
            bail!("www/index.html must hold {{{{{key}}}}} exactly once");
        }
    }
    Ok(out)
}

fn content_security_policy(script: &str, style: &str) -> String {
    format!(
        "default-src 'none'; script-src '{}' blob: 'wasm-unsafe-eval'; style-src '{}'; img-src data: blob:; \
         connect-src 'none'; font-src 'none'; media-src 'none'; object-src 'none'; frame-src 'none'; \
         worker-src blob:; manifest-src 'none'; base-uri 'none'; form-action 'none'",
        csp_hash(script),
        csp_hash(style)
    )
}

fn csp_hash(text: &str) -> String {
    use sha2::Digest as _;
    format!("sha256-{}", base64(&sha2::Sha256::digest(text.as_bytes())))
}

/// The 85 printable ASCII characters used for the inlined module: all of 0x21..0x7E except
/// those that mean something in HTML or in JS strings (" $ % & ' < > \\ `), so the block can
/// never hold "</script".
const BASE85: &[u8; 85] = b"!#()*+,-./0123456789:;=?@ABCDEFGHIJKLMNOPQRSTUVWXYZ[]^_abcdefghijklmnopqrstuvwxyz{|}~";

/// "<byte count>:" and then five characters of [`BASE85`] for every four bytes (big-endian,
/// the last group padded with zeros): 25 % larger than the data, against 33 % for base64.
/// Decoded by `decodeBase85` in www/src/engine.ts.
fn base85(data: &[u8]) -> String {
    let mut out = String::with_capacity(data.len() / 4 * 5 + 16);
    out.push_str(&data.len().to_string());
    out.push(':');
    for chunk in data.chunks(4) {
        let mut b = [0u8; 4];
        b[..chunk.len()].copy_from_slice(chunk);
        let mut v = u32::from_be_bytes(b);
        let mut digits = [0u8; 5];
        for d in digits.iter_mut().rev() {
            *d = BASE85[(v % 85) as usize];
            v /= 85;
        }
        out.extend(digits.iter().map(|&c| c as char));
    }
    out
}

fn base64(data: &[u8]) -> String {
    use base64::Engine as _;
    base64::engine::general_purpose::STANDARD.encode(data)
}

/// The package's entry: `await ready()` loads the module next to this file (read from disk
/// under Node, fetched by URL in a browser), then the functions can be called.
const PACKAGE_ENTRY: &str = r#"// Clockwright package entry. Call `await ready()` once, then use the functions.
import init, * as engine from "./clockwright_wasm.js";

let started = null;
let loaded = false;

/** Loads and starts the WebAssembly module (once); resolves when the functions can be called. */
export function ready() {
  if (started === null) {
    started = (async () => {
      const url = new URL("./clockwright_wasm_bg.wasm", import.meta.url);
      const isNode = typeof process !== "undefined" && process.versions != null && process.versions.node != null;
      if (isNode && url.protocol === "file:") {
        // Node's fetch does not read file: URLs; read the bytes instead. The module name is
        // held in a variable so that bundlers for the browser leave this branch alone.
        const fsModule = "node:fs/promises";
        const { readFile } = await import(fsModule);
        await init({ module_or_path: await readFile(url) });
      } else {
        await init({ module_or_path: url });
      }
      loaded = true;
    })();
  }
  return started;
}

function started_(name, f) {
  return (...args) => {
    if (!loaded) throw new Error(`clockwright: await ready() before calling ${name}()`);
    return f(...args);
  };
}

export const evaluate = started_("evaluate", engine.evaluate);
export const validate = started_("validate", engine.validate);
export const demoDesigns = started_("demoDesigns", engine.demoDesigns);
export const presets = started_("presets", engine.presets);
export const presetSegments = started_("presetSegments", engine.presetSegments);
export const parseSpectrumCsv = started_("parseSpectrumCsv", engine.parseSpectrumCsv);
export const schemaVersion = started_("schemaVersion", engine.schemaVersion);
export const speciesCatalog = started_("speciesCatalog", engine.speciesCatalog);
export const demoPairs = started_("demoPairs", engine.demoPairs);
export const validatePair = started_("validatePair", engine.validatePair);
export const evaluatePair = started_("evaluatePair", engine.evaluatePair);
export const reach = started_("reach", engine.reach);
export const optimum = started_("optimum", engine.optimum);
export const sweep = started_("sweep", engine.sweep);
export const bands = started_("bands", engine.bands);
export const importMeasured = started_("importMeasured", engine.importMeasured);
/** Chunked runs (construct after `await ready()`): simulations, maps and bands. */
export const Simulation = engine.Simulation;
export const MapRun = engine.MapRun;
export const BandRun = engine.BandRun;
"#;

const PACKAGE_ENTRY_TYPES: &str = r#"export type * from "./clockwright_wasm.js";
export { evaluate, validate, demoDesigns, presets, presetSegments, parseSpectrumCsv, schemaVersion, speciesCatalog, demoPairs, validatePair, evaluatePair, reach, optimum, sweep, bands, importMeasured, Simulation, MapRun, BandRun } from "./clockwright_wasm.js";
/** Loads and starts the WebAssembly module (once); await it before calling any other function. */
export function ready(): Promise<void>;
"#;

/// The package manifest. Written as text: the order of the export conditions matters
/// ("types" before "default").
fn package_json() -> String {
    format!(
        r#"{{
  "name": "clockwright",
  "version": "{version}",
  "description": "Clockwright stability model of optical atomic clocks, as WebAssembly (ES module).",
  "license": "MIT OR Apache-2.0",
  "type": "module",
  "main": "./clockwright.js",
  "types": "./clockwright.d.ts",
  "exports": {{
    ".": {{ "types": "./clockwright.d.ts", "default": "./clockwright.js" }},
    "./clockwright_wasm_bg.wasm": "./clockwright_wasm_bg.wasm"
  }},
  "files": ["clockwright.js", "clockwright.d.ts", "clockwright_wasm.js", "clockwright_wasm.d.ts", "clockwright_wasm_bg.wasm", "clockwright_wasm_bg.wasm.d.ts"],
  "sideEffects": false,
  "engines": {{ "node": ">=20" }}
}}
"#,
        version = env!("CARGO_PKG_VERSION")
    )
}

fn open_page(page: &Path) {
    let shown = page.display();
    match Command::new("xdg-open").arg(page).stdin(Stdio::null()).stdout(Stdio::null()).stderr(Stdio::null()).status() {
        Ok(s) if s.success() => println!("pagebuild: opened {shown}"),
        _ => println!("pagebuild: could not open a browser here; open this file in one:\n  file://{shown}"),
    }
}

fn serve(dir: &Path, first_port: u16) -> Result<()> {
    let mut listener = None;
    for port in first_port..first_port.saturating_add(20) {
        if let Ok(l) = TcpListener::bind(("127.0.0.1", port)) {
            listener = Some(l);
            break;
        }
    }
    let listener = listener.ok_or_else(|| anyhow!("no free port on 127.0.0.1 from {first_port} to {}", first_port.saturating_add(19)))?;
    let port = listener.local_addr()?.port();
    println!("pagebuild: serving {} at http://127.0.0.1:{port}/clockwright.html (Ctrl-C stops)", dir.display());
    let dir = dir.to_path_buf();
    for stream in listener.incoming() {
        let Ok(stream) = stream else { continue };
        let dir = dir.clone();
        std::thread::spawn(move || {
            let _ = handle(stream, &dir);
        });
    }
    Ok(())
}

fn content_type(path: &Path) -> &'static str {
    match path.extension().and_then(|e| e.to_str()).unwrap_or("") {
        "html" => "text/html; charset=utf-8",
        "js" => "text/javascript; charset=utf-8",
        "wasm" => "application/wasm",
        "json" => "application/json",
        "css" => "text/css; charset=utf-8",
        "ts" => "text/plain; charset=utf-8",
        "png" => "image/png",
        _ => "application/octet-stream",
    }
}

/// Maps a request path to a file below `dir`; `None` for anything that leaves it.
fn resolve(dir: &Path, url_path: &str) -> Option<PathBuf> {
    let path = url_path.split(['?', '#']).next().unwrap_or("");
    let rel = path.trim_start_matches('/');
    let rel = if rel.is_empty() { "clockwright.html" } else { rel };
    let rel = Path::new(rel);
    if rel.components().any(|c| !matches!(c, Component::Normal(_))) {
        return None;
    }
    Some(dir.join(rel))
}

fn handle(mut stream: TcpStream, dir: &Path) -> std::io::Result<()> {
    stream.set_read_timeout(Some(std::time::Duration::from_secs(10)))?;
    let mut reader = BufReader::new(stream.try_clone()?);
    let mut request_line = String::new();
    reader.read_line(&mut request_line)?;
    loop {
        let mut header = String::new();
        if reader.read_line(&mut header)? == 0 || header.trim().is_empty() {
            break;
        }
    }
    let mut parts = request_line.split_whitespace();
    let (method, target) = (parts.next().unwrap_or(""), parts.next().unwrap_or("/"));
    let respond = |stream: &mut TcpStream, status: &str, ctype: &str, body: &[u8], head_only: bool| -> std::io::Result<()> {
        write!(
            stream,
            "HTTP/1.1 {status}\r\nContent-Type: {ctype}\r\nContent-Length: {}\r\nCache-Control: no-store\r\nX-Content-Type-Options: nosniff\r\nConnection: close\r\n\r\n",
            body.len()
        )?;
        if !head_only {
            stream.write_all(body)?;
        }
        stream.flush()
    };
    if method != "GET" && method != "HEAD" {
        return respond(&mut stream, "405 Method Not Allowed", "text/plain", b"only GET and HEAD\n", false);
    }
    match resolve(dir, target) {
        Some(p) if p.is_file() => {
            let mut body = Vec::new();
            fs::File::open(&p)?.read_to_end(&mut body)?;
            respond(&mut stream, "200 OK", content_type(&p), &body, method == "HEAD")
        }
        _ => respond(&mut stream, "404 Not Found", "text/plain", b"not found\n", method == "HEAD"),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn base85_alphabet_and_known_groups() {
        assert_eq!(BASE85.len(), 85);
        let mut seen = std::collections::HashSet::new();
        for &c in BASE85 {
            assert!((0x21..=0x7e).contains(&c) && !b"\"$%&'<>\\`".contains(&c) && seen.insert(c));
        }
        // 0 -> five times the first character; 0xFFFFFFFF = 84*85^4 + 84*85^3 + 84*85^2 + 84*85 + 80 + ...
        assert_eq!(base85(&[0, 0, 0, 0]), "4:!!!!!");
        let v: u32 = 0xFFFF_FFFF;
        let mut x = v as u64;
        let mut expect = Vec::new();
        for _ in 0..5 {
            expect.push(BASE85[(x % 85) as usize]);
            x /= 85;
        }
        expect.reverse();
        assert_eq!(base85(&[0xFF; 4]), format!("4:{}", String::from_utf8(expect).unwrap()));
        // A short tail is padded: one byte 0x01 is the group 0x01000000.
        assert_eq!(base85(&[1]).len(), "1:".len() + 5);
    }

    #[test]
    fn base64_matches_rfc4648_vectors() {
        for (i, o) in [("", ""), ("f", "Zg=="), ("fo", "Zm8="), ("foo", "Zm9v"), ("foob", "Zm9vYg=="), ("fooba", "Zm9vYmE="), ("foobar", "Zm9vYmFy")] {
            assert_eq!(base64(i.as_bytes()), o);
        }
    }

    #[test]
    fn zopfli_blocks_inflate_to_the_same_bytes() {
        // Another implementation (miniz_oxide) must read the zlib data back exactly, checksum included.
        let mut data: Vec<u8> = (0..50_000u32).map(|i| (i.wrapping_mul(2_654_435_761) >> 13) as u8 & 0x3f).collect();
        data.extend_from_slice(&[7u8; 10_000]);
        for input in [&data[..], b"", b"x"] {
            let packed = zlib(input).unwrap();
            assert_eq!(miniz_oxide::inflate::decompress_to_vec_zlib(&packed).unwrap(), input);
        }
        assert!(zlib(&data).unwrap().len() < data.len() / 2);
    }

    #[test]
    fn csp_hash_of_known_text() {
        // sha256("abc") in base64.
        assert_eq!(csp_hash("abc"), "sha256-ungWv48Bz+pBQUDeXa4iI7ADYaOWF3qctBD/YfIAFa0=");
    }

    #[test]
    fn page_assembly_fills_each_placeholder_once_and_hashes_exact_content() {
        let t = "<meta content=\"{{csp}}\"><style>{{style}}</style><script type=\"application/wasm+base64\">{{wasm}}</script><script type=\"text/plain\">{{worker}}</script><script type=\"text/plain\">{{program}}</script><script type=\"module\">{{script}}</script>";
        let blocks = Blocks { wasm: "AGFzbQ==", worker: "d29ya2Vy", program: "cHJvZ3JhbQ==" };
        let html = assemble_page(t, "let a = '{{style}}';", "b{color:red}", &blocks).unwrap();
        assert!(html.contains(">d29ya2Vy</script>"));
        assert!(html.contains(">cHJvZ3JhbQ==</script>"));
        assert!(html.contains("worker-src blob:"));
        assert!(html.contains(">AGFzbQ==</script>"));
        assert!(html.contains("<script type=\"module\">let a = '{{style}}';</script>"));
        assert!(html.contains(&csp_hash("let a = '{{style}}';")));
        assert!(html.contains(&csp_hash("b{color:red}")));
        assert!(html.contains("default-src 'none'") && html.contains("connect-src 'none'") && html.contains("'wasm-unsafe-eval'"));
        assert!(!html.contains("unsafe-inline") && !html.contains("'unsafe-eval'"));
        let empty = Blocks { wasm: "", worker: "", program: "" };
        assert!(assemble_page(t, "x='</script>'", "", &empty).is_err());
        assert!(assemble_page("{{csp}}{{style}}{{script}}{{wasm}}{{worker}}", "", "", &empty).is_err());
        assert!(assemble_page("{{csp}}{{style}}{{script}}{{wasm}}{{worker}}{{program}}{{other}}", "", "", &empty).is_err());
    }

    #[test]
    fn package_manifest_is_json_and_names_the_entry() {
        let v: serde_json::Value = serde_json::from_str(&package_json()).unwrap();
        assert_eq!(v["exports"]["."]["default"], "./clockwright.js");
        assert_eq!(v["type"], "module");
        let text = package_json();
        assert!(text.find("\"types\": \"./clockwright.d.ts\", \"default\"").is_some(), "types must come first");
        for f in v["files"].as_array().unwrap() {
            let f = f.as_str().unwrap();
            assert!(f.starts_with("clockwright"), "{f}");
        }
        assert!(PACKAGE_ENTRY.contains("export function ready()"));
        assert!(PACKAGE_ENTRY_TYPES.contains("export function ready(): Promise<void>;"));
    }

    #[test]
    fn server_paths_stay_inside_the_served_folder() {
        let d = Path::new("/srv/x");
        assert_eq!(resolve(d, "/").unwrap(), d.join("clockwright.html"));
        assert_eq!(resolve(d, "/pkg/clockwright.js?x=1").unwrap(), d.join("pkg/clockwright.js"));
        assert!(resolve(d, "/../etc/passwd").is_none());
        assert!(resolve(d, "/pkg/../../x").is_none());
    }

    #[test]
    fn the_wasm_bindgen_pins_are_identical() {
        check_version_pins(&repo_root().unwrap()).unwrap();
        assert_eq!(pin_of("a = \"1\"\nwasm-bindgen = \"=0.2.1\"\n", "wasm-bindgen").as_deref(), Some("=0.2.1"));
        assert_eq!(pin_of("wasm-bindgen-cli-support = \"=0.2.1\"\n", "wasm-bindgen"), None);
    }
}
