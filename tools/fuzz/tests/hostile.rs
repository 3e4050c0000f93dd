//! The hostile-input corpus (tests/fuzz/hostile/, expectations in expect.json) through the
//! engine's entry points, as the page hands the files over: every file gets a readable
//! error, or a clean result whose numbers are all finite, within the per-input time limit.
//! The same files go through the page itself in tests/browser/hostile.test.mjs.

use clockwright_core::InputError;
use clockwright_fuzz::{check_within, entries, readable};
use serde_json::Value;
use std::path::PathBuf;

fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../../tests/fuzz/hostile")
}

/// A workspace file as the page reads it: UTF-8 with replacement characters, a leading
/// byte-order mark dropped (File.text()), JSON, then every design through the engine.
fn workspace(bytes: &[u8]) -> Result<Vec<clockwright_core::Evaluation>, InputError> {
    let text = String::from_utf8_lossy(bytes);
    let text = text.strip_prefix('\u{feff}').unwrap_or(&text);
    let v: Value = serde_json::from_str(text).map_err(|e| InputError::single("(workspace)", "", format!("must be JSON: {e}")))?;
    let designs = v.get("designs").and_then(Value::as_array).ok_or_else(|| InputError::single("designs", "missing", "must be a list of {colour, design}"))?;
    designs
        .iter()
        .map(|d| clockwright_fuzz::page::evaluate_value(d.get("design").cloned().unwrap_or(Value::Null), Value::Null))
        .collect()
}

fn expectations() -> Value {
    serde_json::from_str(&std::fs::read_to_string(root().join("expect.json")).expect("expect.json")).expect("expect.json is JSON")
}

fn verdict(kind: &str, name: &str, bytes: &[u8]) -> (bool, String) {
    let entry = match kind {
        "spectrum" => entries::entry("spectrum_csv"),
        "measured" => entries::entry("measured_csv"),
        _ => None,
    };
    if let Some(e) = entry {
        // Behaviour only; the time of inputs is judged by the long fuzz pass, not a test.
        let c = check_within(e, bytes, None);
        assert!(c.failure.is_none(), "{kind}/{name}: {}", c.failure.map(|f| f.to_string()).unwrap_or_default());
        return (c.accepted, String::new());
    }
    let r = workspace(bytes);
    match r {
        Ok(evals) => {
            for ev in &evals {
                let bad = clockwright_core::finite::non_finite(ev);
                assert!(bad.is_empty(), "{kind}/{name}: {bad:?}");
            }
            (true, String::new())
        }
        Err(e) => {
            assert!(readable(&e).is_none(), "{kind}/{name}: {e}");
            (false, e.to_string())
        }
    }
}

#[test]
fn every_hostile_file_gets_its_expected_answer() {
    let exp = expectations();
    let mut seen = 0;
    for kind in ["workspace", "spectrum", "measured"] {
        let list = exp[kind].as_object().expect("a group of files");
        // Every file in the folder is listed, so none is forgotten.
        let mut files: Vec<String> = std::fs::read_dir(root().join(kind)).expect("folder").map(|e| e.expect("entry").file_name().to_string_lossy().into_owned()).collect();
        files.sort();
        let mut listed: Vec<String> = list.keys().cloned().collect();
        listed.sort();
        assert_eq!(files, listed, "{kind}: files and expect.json differ");
        for (name, want) in list {
            let bytes = std::fs::read(root().join(kind).join(name)).expect("file");
            let (accepted, msg) = verdict(kind, name, &bytes);
            assert_eq!(if accepted { "ok" } else { "error" }, want.as_str().expect("ok or error"), "{kind}/{name}: {msg}");
            seen += 1;
        }
    }
    assert!(seen >= 30, "{seen} files");
}

#[test]
fn markup_in_names_stays_text_in_the_result() {
    let bytes = std::fs::read(root().join("workspace/markup-in-names.json")).expect("file");
    let v: Value = serde_json::from_slice(&bytes).expect("JSON");
    let d = clockwright_core::Design::from_value(v["designs"][0]["design"].clone()).expect("a valid design");
    assert_eq!(d.name, "<img src=x onerror=alert(1)><script>alert(2)</script>");
    let r = workspace(&bytes).expect("evaluates");
    assert_eq!(r.len(), 2);
}

#[test]
fn ten_megabyte_lines_are_refused_by_line() {
    for (kind, head) in [("spectrum_csv", "f_hz,l_dbc\n"), ("measured_csv", "# tau0_s: 1\ny\n")] {
        let mut text = String::from(head);
        text.push_str(&"1,".repeat(5_000_000));
        text.push('\n');
        let e = match kind {
            "spectrum_csv" => clockwright_fuzz::page::parse_spectrum_csv(&text).map(|_| ()).unwrap_err(),
            _ => clockwright_fuzz::page::import_measured_value(&text, Value::Null).map(|_| ()).unwrap_err(),
        };
        let line = head.lines().count() + 1;
        assert_eq!(e.problems[0].path, format!("line {line}"), "{kind}: {e}");
        assert!(e.problems[0].allowed.contains("1000 bytes"), "{kind}: {e}");
        assert!(e.to_string().len() < 1000, "{kind}: the error quotes the line only in part");
    }
}

#[test]
fn a_design_document_with_thousands_of_problems_lists_a_hundred_and_counts_the_rest() {
    let mut d: Value = serde_json::from_str(&std::fs::read_to_string(PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../../core/designs/lattice.json")).expect("demo")).expect("JSON");
    let rows: Vec<Value> = (0..200).map(|k| serde_json::json!([-(k as f64), f64::MAX])).collect();
    d["laser"]["table"] = serde_json::json!({ "unit": "s_y", "points": rows });
    let e = clockwright_fuzz::page::evaluate_value(d, Value::Null).unwrap_err();
    assert_eq!(e.problems.len(), clockwright_core::error::MAX_PROBLEMS + 1);
    let last = e.problems.last().expect("a count");
    assert_eq!(last.path, "(more)");
    assert!(last.value.starts_with("300 more"), "{last}");
}
