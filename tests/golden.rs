//! Golden outputs: the JSON of a few commands, saved in `tests/golden/`, must come back with
//! the same numbers. A restructuring or a faster engine may move a result only within the
//! stated tolerances; anything larger is a change of behaviour that must be meant (then
//! regenerate the files with `SAGTRIP_BLESS=1 cargo test --release --test golden` and say
//! why in the commit).
//!
//! Tolerances: times in milliseconds 0.1 ms and in seconds 0.1 ms (the accuracy sagtrip
//! states for its timings, docs/engine.md); volts 0.1 V or 0.1%, whichever is larger (the
//! threshold search's own resolution); any other number 0.1% (common practice for a
//! regression check of a numerical tool). Wall times, solver counters and file names are
//! not compared.

use std::path::PathBuf;
use std::process::Command;

use serde_json::Value;

fn golden(name: &str) -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("tests/golden")
        .join(name)
}

/// Runs sagtrip and returns its JSON output.
fn json_of(args: &[&str]) -> Value {
    let out = Command::new(env!("CARGO_BIN_EXE_sagtrip"))
        .args(args)
        .current_dir(env!("CARGO_MANIFEST_DIR"))
        .output()
        .expect("run sagtrip");
    assert!(
        out.status.success(),
        "sagtrip {args:?}: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    let text = String::from_utf8_lossy(&out.stdout);
    // The caution follows the JSON object on its own line.
    let end = text.rfind('}').expect("a JSON object");
    serde_json::from_str(&text[..=end]).expect("valid JSON")
}

/// Keys whose values are not results.
fn ignored(key: &str) -> bool {
    key.contains("wall") || matches!(key, "stats" | "trace" | "plot")
}

/// The allowed difference for a number under `key`.
fn tolerance(key: &str, expected: f64) -> f64 {
    if key.ends_with("_ms") {
        0.1
    } else if key.ends_with("_s") {
        1e-4
    } else if key.ends_with("_v") || key == "volts" {
        (1e-3 * expected.abs()).max(0.1)
    } else {
        1e-3 * expected.abs().max(1e-9)
    }
}

/// Compares `actual` with `expected`, collecting every difference with its path.
fn compare(path: &str, key: &str, actual: &Value, expected: &Value, problems: &mut Vec<String>) {
    match (actual, expected) {
        (Value::Object(a), Value::Object(e)) => {
            for (k, ev) in e {
                if ignored(k) {
                    continue;
                }
                match a.get(k) {
                    Some(av) => compare(&format!("{path}.{k}"), k, av, ev, problems),
                    None => problems.push(format!("{path}.{k}: missing")),
                }
            }
            for k in a.keys() {
                if !e.contains_key(k) && !ignored(k) {
                    problems.push(format!("{path}.{k}: not in the golden file"));
                }
            }
        }
        (Value::Array(a), Value::Array(e)) => {
            if a.len() != e.len() {
                problems.push(format!("{path}: {} items, expected {}", a.len(), e.len()));
                return;
            }
            for (i, (av, ev)) in a.iter().zip(e).enumerate() {
                compare(&format!("{path}[{i}]"), key, av, ev, problems);
            }
        }
        (Value::Number(a), Value::Number(e)) => {
            let (a, e) = (
                a.as_f64().unwrap_or(f64::NAN),
                e.as_f64().unwrap_or(f64::NAN),
            );
            let allowed = tolerance(key, e);
            if (a - e).abs() > allowed || a.is_nan() != e.is_nan() {
                problems.push(format!("{path}: {a}, expected {e} (allowed {allowed})"));
            }
        }
        (a, e) => {
            if a != e {
                problems.push(format!("{path}: {a}, expected {e}"));
            }
        }
    }
}

/// Checks a command's JSON against its golden file (or writes the file when blessing).
fn check(name: &str, args: &[&str]) {
    let actual = json_of(args);
    let path = golden(name);
    if std::env::var_os("SAGTRIP_BLESS").is_some() {
        std::fs::create_dir_all(path.parent().unwrap()).unwrap();
        std::fs::write(&path, serde_json::to_string_pretty(&actual).unwrap() + "\n").unwrap();
        return;
    }
    let text = std::fs::read_to_string(&path).expect("golden file");
    let expected: Value = serde_json::from_str(&text).expect("golden JSON");
    let mut problems = Vec::new();
    compare("", "", &actual, &expected, &mut problems);
    assert!(
        problems.is_empty(),
        "sagtrip {args:?} differs from {}:\n{}",
        path.display(),
        problems.join("\n")
    );
}

#[test]
fn a_dip_run_of_the_reference_guard_keeps_its_numbers() {
    check(
        "run-dip-40-10cyc.json",
        &["run", "--event", "dip:40%:10cyc", "--json"],
    );
}

#[test]
fn an_interruption_run_of_the_reference_guard_keeps_its_numbers() {
    check(
        "run-interrupt-10cyc.json",
        &["run", "--event", "interrupt:10cyc@90", "--json"],
    );
}

#[test]
fn a_recloser_replay_keeps_its_numbers() {
    check(
        "replay-recloser.json",
        &[
            "replay",
            "waveforms/recloser.wav",
            "--calibrate",
            "230V",
            "--json",
        ],
    );
}

#[test]
fn detection_in_a_noisy_minute_keeps_its_numbers() {
    check(
        "detect-noisy-minute.json",
        &[
            "detect",
            "waveforms/noisy-minute.wav",
            "--calibrate",
            "230V",
            "--json",
        ],
    );
}

#[test]
fn a_small_sweep_keeps_its_numbers() {
    check(
        "sweep-small.json",
        &[
            "sweep",
            "--levels",
            "0:80:40",
            "--durations",
            "1cyc:1s",
            "--duration-count",
            "3",
            "--phases",
            "0,90",
            "--no-refine",
            "--quiet",
            "--json",
        ],
    );
}
