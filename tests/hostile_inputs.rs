//! The corpus of hostile inputs in `tests/fixtures/`: each file is named by what is wrong
//! with it, and each must be refused with exit code 2 and a message naming the place and
//! the problem, quickly and without a panic. Every file of the folder is in the table, so a
//! new fixture cannot be forgotten.

use std::path::Path;
use std::process::Command;

/// A fixture, the command that reads it (`{}` stands for its path) and a fragment the
/// message must hold.
const CASES: &[(&str, &[&str], &str)] = &[
    (
        "circuit-femtohenry-relay-coil.toml",
        &["check", "--circuit", "{}"],
        "part.relay.coil_inductance: 1e-18 H is beyond any real part",
    ),
    (
        "circuit-relay-bouncing-1e5-times.toml",
        &["check", "--circuit", "{}"],
        "part.relay.bounce_count: 100000 is beyond any real part: at most 100",
    ),
    (
        "circuit-femtofarad-reservoir.toml",
        &["check", "--circuit", "{}"],
        "part.c_hold.capacitance: 1e-18 F is beyond any real part",
    ),
    (
        "circuit-mains-at-a-microhertz.toml",
        &["check", "--circuit", "{}"],
        "part.mains.sine.frequency: 1e-6 Hz is beyond any real part",
    ),
    (
        "circuit-mains-at-a-megahertz.toml",
        &["run", "--circuit", "{}", "--event", "dip:40%:10ms"],
        "the mains `mains` runs at 1e6 Hz",
    ),
    (
        "circuit-without-a-relay.toml",
        &["run", "--circuit", "{}", "--event", "dip:40%:10cyc"],
        "no relay to switch the load",
    ),
    (
        "circuit-capacitor-of-1e308-farads.toml",
        &["check", "--circuit", "{}"],
        "part.c.capacitance: 1e308 F is beyond any real part",
    ),
    (
        "circuit-resistor-of-1e-300-ohms.toml",
        &["check", "--circuit", "{}"],
        "part.load.resistance: 1e-300 ohm is beyond any real part",
    ),
    (
        "circuit-current-sources-in-series.toml",
        &["check", "--circuit", "{}"],
        "no path to gnd from node a",
    ),
    (
        "circuit-current-source-into-an-inductor.toml",
        &["check", "--circuit", "{}"],
        "node a meets the rest of the circuit only through current sources and inductors",
    ),
    (
        "events-with-a-zero-gap.toml",
        &["run", "--event-file", "{}"],
        "event.2: step 2 (`gap:0ms`) lasts no time",
    ),
    (
        "events-with-a-nan-phase.toml",
        &["run", "--event-file", "{}"],
        "phase: `nan` is not a phase angle in degrees",
    ),
    (
        "events-with-a-mistake-in-the-third.toml",
        &["run", "--event-file", "{}"],
        "event.3.residual: a level is a percentage of nominal",
    ),
    (
        "events-with-a-dip-shorter-than-its-edge.toml",
        &["run", "--event-file", "{}"],
        "shorter than the 5e-3 s edge",
    ),
    (
        "plan-with-nothing-to-run.toml",
        &["table", "--plan", "{}"],
        "nothing to run",
    ),
    (
        "recording-all-zero.csv",
        &["detect", "{}", "--nominal", "230V/50Hz"],
        "no mains in the recording",
    ),
    (
        "recording-dc-only.csv",
        &["detect", "{}", "--nominal", "230V/50Hz"],
        "no mains in the recording",
    ),
    (
        "recording-with-a-corrupt-sample.csv",
        &["detect", "{}"],
        "sample 2000 (at 0.200000 s) reads 1e200 V",
    ),
    (
        "rectifier-with-bad-values.toml",
        &["check", "--circuit", "{}"],
        "part.load.resistance: must be positive",
    ),
];

#[test]
fn every_hostile_fixture_is_refused_with_its_place_and_problem() {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures");
    for &(name, args, expected) in CASES {
        let path = dir.join(name);
        let args: Vec<String> = args
            .iter()
            .map(|a| a.replace("{}", path.to_str().unwrap()))
            .collect();
        let out = Command::new(env!("CARGO_BIN_EXE_sagtrip"))
            .args(&args)
            .current_dir(env!("CARGO_MANIFEST_DIR"))
            .output()
            .expect("run sagtrip");
        let err = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(2), "{name}: {args:?}: {err}");
        assert!(err.contains(expected), "{name}: {args:?}: {err}");
        assert!(!err.contains("panicked"), "{name}: {err}");
    }
}

#[test]
fn every_fixture_is_in_the_corpus() {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures");
    for entry in std::fs::read_dir(dir).unwrap() {
        let name = entry.unwrap().file_name().to_string_lossy().to_string();
        assert!(
            CASES.iter().any(|c| c.0 == name),
            "tests/fixtures/{name} is not in the corpus of tests/hostile_inputs.rs"
        );
    }
}
