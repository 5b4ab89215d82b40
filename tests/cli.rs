//! The binary run as a user would: on the bundled examples and on broken fixtures.

use std::path::PathBuf;
use std::process::{Command, Output};

fn sagtrip(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_sagtrip"))
        .args(args)
        .current_dir(env!("CARGO_MANIFEST_DIR"))
        .output()
        .expect("run sagtrip")
}

/// Runs sagtrip and requires success, showing its error output otherwise.
fn sagtrip_ok(args: &[&str]) -> Output {
    let out = sagtrip(args);
    assert!(
        out.status.success(),
        "sagtrip {args:?}: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    out
}

/// Runs sagtrip, requires a failure whose error output contains `expected`, and returns
/// that output.
fn sagtrip_fails(args: &[&str], expected: &str) -> String {
    let out = sagtrip(args);
    let err = String::from_utf8_lossy(&out.stderr).to_string();
    assert!(!out.status.success(), "sagtrip {args:?} succeeded");
    assert!(err.contains(expected), "sagtrip {args:?}: {err}");
    err
}

/// Runs sagtrip and requires exit code 2 (an input mistake) with `expected` in the message.
fn refused_as_input(args: &[&str], expected: &str) {
    let out = sagtrip(args);
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{args:?}: {err}");
    assert!(err.contains(expected), "{args:?}: {err}");
}

fn temp_path(name: &str) -> PathBuf {
    let dir = std::env::temp_dir().join(format!("sagtrip-cli-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    dir.join(name)
}

#[test]
fn check_lists_parts_nodes_and_parameter_sets() {
    let out = sagtrip_ok(&["check", "--circuit", "examples/bridge-rectifier.toml"]);
    let text = String::from_utf8(out.stdout).unwrap();
    assert!(text.contains("valid"));
    assert!(text.contains("parts (5)"));
    assert!(text.contains("bridge"));
    assert!(text.contains("nodes (4, gnd is the reference)"));
    assert!(text.contains("rectifier"));
    assert!(text.contains("used by: bridge"));
}

#[test]
fn every_example_circuit_is_valid() {
    for entry in std::fs::read_dir(concat!(env!("CARGO_MANIFEST_DIR"), "/examples")).unwrap() {
        let path = entry.unwrap().path();
        if path.extension().is_some_and(|e| e == "toml") {
            let out = sagtrip(&["check", "--circuit", path.to_str().unwrap()]);
            assert!(
                out.status.success(),
                "{}: {}",
                path.display(),
                String::from_utf8_lossy(&out.stderr)
            );
        }
    }
}

#[test]
fn run_writes_a_csv_trace() {
    let trace = temp_path("bridge.csv");
    sagtrip_ok(&[
        "run",
        "--circuit",
        "examples/bridge-rectifier.toml",
        "--duration",
        "100ms",
        "--trace",
        trace.to_str().unwrap(),
        "--probe",
        "rail",
        "--probe",
        "current:load",
    ]);
    let csv = std::fs::read_to_string(&trace).unwrap();
    let mut lines = csv.lines();
    assert_eq!(lines.next().unwrap(), "time_s,rail_V,load_A");
    let rows: Vec<Vec<f64>> = lines
        .map(|l| l.split(',').map(|v| v.parse().unwrap()).collect())
        .collect();
    assert!(rows.len() > 100, "{}", rows.len());
    let last = rows.last().unwrap();
    assert!((last[0] - 0.1).abs() < 1e-12);
    // Ohm's law between the two probes: the load current is rail / 100 ohm.
    assert!((last[2] - last[1] / 100.0).abs() < 1e-9);
    // A 12 V rms bridge: the rail sits below the 16.97 V peak minus two diode drops.
    assert!(last[1] > 13.0 && last[1] < 16.0, "{}", last[1]);
}

#[test]
fn run_prints_json() {
    let out = sagtrip_ok(&[
        "run",
        "--circuit",
        "examples/rc-step.toml",
        "--duration",
        "6ms",
        "--json",
        "--probe",
        "out",
    ]);
    let value: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let probe = &value["probes"][0];
    assert_eq!(probe["probe"], "out_V");
    // RC charge 5 ms after the step: 5 (1 - e^-5) = 4.96631 V (Hayt, Kemmerly and Durbin).
    let final_v = probe["last"].as_f64().unwrap();
    assert!((final_v - 4.96631).abs() < 5e-3, "{final_v}");
    assert!(value["stats"]["accepted_steps"].as_u64().unwrap() > 10);
}

#[test]
fn a_broken_file_fails_with_positions_and_writes_nothing() {
    let trace = temp_path("never.csv");
    let out = sagtrip(&[
        "run",
        "--circuit",
        "tests/fixtures/rectifier-with-bad-values.toml",
        "--trace",
        trace.to_str().unwrap(),
    ]);
    assert!(!out.status.success());
    let err = String::from_utf8(out.stderr).unwrap();
    assert!(
        err.contains("rectifier-with-bad-values.toml:10:1: part.d1.saturation_curent"),
        "{err}"
    );
    assert!(
        err.contains(
            "rectifier-with-bad-values.toml:20:14: part.load.resistance: must be positive"
        ),
        "{err}"
    );
    assert!(!err.contains("panicked"));
    assert!(!trace.exists());
}

#[test]
fn a_missing_file_and_a_bad_probe_are_clear_errors() {
    sagtrip_fails(
        &["check", "--circuit", "examples/no-such-file.toml"],
        "cannot read circuit file",
    );
    sagtrip_fails(
        &[
            "run",
            "--circuit",
            "examples/rc-step.toml",
            "--probe",
            "nowhere",
        ],
        "no node named `nowhere`",
    );
}

#[test]
fn help_carries_the_safety_caution() {
    let out = sagtrip(&["--help"]);
    let text = String::from_utf8(out.stdout).unwrap();
    assert!(text.contains("mains voltage can kill"));
}

#[test]
fn run_without_a_circuit_powers_up_the_reference_guard() {
    let out = sagtrip_ok(&["run", "--probe", "sense", "--probe", "vcc", "--json"]);
    let value: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert!(value["circuit"]
        .as_str()
        .unwrap()
        .contains("built-in reference guard"));
    let relay = &value["relays"][0];
    assert_eq!(relay["relay"], "relay");
    let pickup = relay["first_pickup_s"].as_f64().unwrap();
    // Energised well under a second after power-up (the guard's design estimate).
    assert!(pickup > 0.3 && pickup < 1.0, "{pickup}");
    // The contact makes 6 ms after pick-up (the close travel).
    let made = relay["first_contact_made_s"].as_f64().unwrap();
    assert!((made - pickup - 6e-3).abs() < 1e-9);
    assert_eq!(relay["operated_at_end"], true);
    // Settled supply rail at the regulator's 12 V.
    let vcc = &value["probes"][1];
    assert_eq!(vcc["probe"], "vcc_V");
    assert!((vcc["mean"].as_f64().unwrap() - 12.0).abs() < 0.05);

    let text = sagtrip(&["run", "--probe", "sense"]);
    let text = String::from_utf8(text.stdout).unwrap();
    assert!(text.contains("relay `relay` first picked up at"), "{text}");
    assert!(
        text.contains("settled values over the last 20 ms"),
        "{text}"
    );
}

#[test]
fn check_without_a_circuit_lists_the_reference_guard() {
    let out = sagtrip_ok(&["check"]);
    let text = String::from_utf8(out.stdout).unwrap();
    assert!(text.contains("built-in reference guard"));
    assert!(text.contains("relay          relay"));
    // The unused normally-closed contact is not listed as a connection.
    assert!(!text.contains("normally_closed="));
}

#[test]
fn presets_lists_the_iec_tests_and_synth_writes_a_wav() {
    let out = sagtrip(&["presets"]);
    let text = String::from_utf8(out.stdout).unwrap();
    assert!(text.contains("class3-dip-40"));
    assert!(text.contains("IEC 61000-4-11 Table 1"));
    let wav = temp_path("dip.wav");
    let out = sagtrip_ok(&[
        "synth",
        "class3-dip-40@90",
        "--out",
        wav.to_str().unwrap(),
        "--format",
        "float32",
        "--rate",
        "8000",
    ]);
    let text = String::from_utf8(out.stdout).unwrap();
    assert!(text.contains("650.538 V per full scale"), "{text}");
    let reader = hound::WavReader::open(&wav).unwrap();
    assert_eq!(reader.spec().sample_rate, 8000);
    assert_eq!(reader.spec().sample_format, hound::SampleFormat::Float);
}

#[test]
fn a_malformed_event_is_refused_with_a_marker() {
    let err = sagtrip_fails(&["run", "--event", "dip:40%:10cycles"], "found `10cycles`");
    assert!(err.contains("        ^^^^^^^^"), "{err}");
}

#[test]
fn run_event_json_has_the_promised_fields() {
    let out = sagtrip_ok(&["run", "--event", "interrupt:10cyc", "--json"]);
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["tripped"], true);
    assert!(v["trip_latency_ms"].as_f64().unwrap() > 10.0);
    assert!(v["restore_latency_ms"].as_f64().unwrap() > 100.0);
    assert!(v["relay_transitions"].as_u64().unwrap() == 2);
    assert_eq!(v["chatter"], false);
    assert!(v["load_interruption_ms"].as_f64().unwrap() > 100.0);
    assert!(v["min_rail_v"].as_f64().is_some());
}

#[test]
fn event_plots_are_written_as_svg_and_png() {
    let svg = temp_path("dip.svg");
    let png = temp_path("dip.png");
    for path in [&svg, &png] {
        sagtrip_ok(&[
            "run",
            "--event",
            "dip:40%:10cyc@90",
            "--plot",
            path.to_str().unwrap(),
        ]);
    }
    let text = std::fs::read_to_string(&svg).unwrap();
    for label in [
        "supply",
        "comparator inputs",
        "relay coil current",
        "load path",
        "trip ",
        "reconnected ",
        "pick-up 22.0 mA",
        "time since onset (ms)",
    ] {
        assert!(text.contains(label), "{label}");
    }
    let bytes = std::fs::read(&png).unwrap();
    assert_eq!(&bytes[..8], b"\x89PNG\r\n\x1a\n");
    assert!(bytes.len() > 50_000);
    // A plot name without .svg or .png is refused before any work.
    let out = sagtrip(&["run", "--event", "interrupt:1cyc", "--plot", "x.pdf"]);
    assert!(!out.status.success());
}

#[test]
fn sweep_writes_the_map_and_its_tables() {
    let dir = temp_path("sweep-out");
    let svg = temp_path("map.svg");
    let out = sagtrip_ok(&[
        "sweep",
        "--levels",
        "0:80:80",
        "--durations",
        "1cyc:200ms",
        "--duration-count",
        "2",
        "--phases",
        "0",
        "--no-refine",
        "--quiet",
        "--out",
        dir.to_str().unwrap(),
        "--plot",
        svg.to_str().unwrap(),
    ]);
    let text = String::from_utf8(out.stdout).unwrap();
    assert!(
        text.contains("4 points (2 levels x 2 durations x 1 phases)"),
        "{text}"
    );
    let csv = std::fs::read_to_string(dir.join("points.csv")).unwrap();
    assert_eq!(csv.lines().count(), 5);
    assert!(csv.starts_with("level_pct,duration_s,phase_deg,outcome"));
    // A one-cycle interruption rides through; 200 ms at 0% trips.
    assert!(csv.contains("0,0.02,0,rides-through"), "{csv}");
    assert!(csv.contains("0,0.2,0,trips"), "{csv}");
    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("sweep.json")).unwrap()).unwrap();
    assert_eq!(json["points"].as_array().unwrap().len(), 4);
    let map = std::fs::read_to_string(&svg).unwrap();
    for label in [
        "ITI (CBEMA) 2000",
        "SEMI F47-0706",
        "IEC 61000-4-11",
        "event duration",
    ] {
        assert!(map.contains(label), "{label}");
    }
}

#[test]
fn sweep_reports_the_longest_ride_through_per_level() {
    let dir = temp_path("sweep-duration-boundary");
    let _ = std::fs::remove_dir_all(&dir);
    let out = sagtrip_ok(&[
        "sweep",
        "--levels",
        "0:80:80",
        "--durations",
        "1cyc:200ms",
        "--duration-count",
        "2",
        "--phases",
        "0",
        "--quiet",
        "--json",
        "--out",
        dir.to_str().unwrap(),
    ]);
    let json: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let list = json["duration_boundary"].as_array().unwrap();
    assert_eq!(list.len(), 2, "{list:?}");
    for b in list {
        // Between the grid's one-cycle ride-through and its 200 ms trip.
        let d = b["longest_ride_through_s"].as_f64().unwrap();
        assert!((0.02..0.2).contains(&d), "{b}");
        assert_eq!(b["status"], "found");
    }
    let csv = std::fs::read_to_string(dir.join("duration-boundary.csv")).unwrap();
    assert_eq!(csv.lines().count(), 3, "{csv}");
    assert!(csv.starts_with("level_pct,longest_ride_through_s"));
}

fn small_sweep(extra: &[&str]) -> Output {
    let mut args = vec![
        "sweep",
        "--levels",
        "0:80:40",
        "--durations",
        "1cyc:300ms",
        "--duration-count",
        "3",
        "--phases",
        "0",
        "--no-refine",
        "--quiet",
    ];
    args.extend_from_slice(extra);
    sagtrip(&args)
}

#[test]
fn an_interrupted_sweep_resumes_where_it_stopped() {
    let dir = temp_path("resume");
    let _ = std::fs::remove_dir_all(&dir);
    let d = dir.to_str().unwrap();
    let out = small_sweep(&["--out", d]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let complete = std::fs::read_to_string(dir.join("points.csv")).unwrap();
    assert_eq!(complete.lines().count(), 10);
    // The folder holds a sweep: running again without --resume refuses and keeps it.
    let out = small_sweep(&["--out", d]);
    assert!(!out.status.success());
    assert!(String::from_utf8_lossy(&out.stderr).contains("--resume"));
    assert_eq!(
        std::fs::read_to_string(dir.join("points.csv")).unwrap(),
        complete
    );
    // Simulate an interruption: keep four points and half a line.
    let kept: Vec<&str> = complete.lines().take(5).collect();
    std::fs::write(
        dir.join("points.csv"),
        format!("{}\n40,0.3,0,tri", kept.join("\n")),
    )
    .unwrap();
    let out = small_sweep(&["--out", d, "--resume"]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("sweep.json")).unwrap()).unwrap();
    assert_eq!(json["points"].as_array().unwrap().len(), 9);
    // The torn line was dropped before appending: every journal line reads as a point (a
    // row glued onto the half row would not), and the same points as the whole sweep.
    let resumed = std::fs::read_to_string(dir.join("points.csv")).unwrap();
    let mut lines: Vec<&str> = resumed.lines().skip(1).collect();
    for line in &lines {
        assert!(
            sagtrip::sweep::parse_point_line(line).is_some(),
            "{line:?} in\n{resumed}"
        );
    }
    let mut whole: Vec<&str> = complete.lines().skip(1).collect();
    lines.sort_unstable();
    whole.sort_unstable();
    assert_eq!(lines, whole);
    // Other settings cannot resume the folder.
    sagtrip_fails(
        &[
            "sweep",
            "--levels",
            "0:80:80",
            "--quiet",
            "--no-refine",
            "--out",
            d,
            "--resume",
        ],
        "other settings",
    );
}

#[test]
fn shards_merge_into_the_whole_sweep() {
    // Durations that are not round numbers (log-spaced from one cycle to 1 s), both
    // refinements on: the merged shards' files are byte for byte the unsharded sweep's.
    // Before, the settings' numbers read back from JSON a bit off, so merging lost the
    // points of one column and resuming a finished folder was refused.
    let base = temp_path("shards");
    let _ = std::fs::remove_dir_all(&base);
    let grid = [
        "sweep",
        "--levels",
        "0:80:20",
        "--durations",
        "1cyc:1s",
        "--duration-count",
        "5",
        "--phases",
        "0,90",
        "--resolution",
        "2",
        "--quiet",
    ];
    let run = |extra: &[&str]| {
        let mut args = grid.to_vec();
        args.extend_from_slice(extra);
        sagtrip_ok(&args);
    };
    let whole = base.join("whole");
    run(&["--out", whole.to_str().unwrap()]);
    let mut folders = Vec::new();
    for k in 1..=3 {
        let dir = base.join(format!("shard{k}"));
        run(&["--out", dir.to_str().unwrap(), "--shard", &format!("{k}/3")]);
        folders.push(dir.to_str().unwrap().to_string());
    }
    let merged = base.join("merged");
    let mut args = vec!["merge"];
    args.extend(folders.iter().map(String::as_str));
    args.extend(["--out", merged.to_str().unwrap()]);
    let out = sagtrip_ok(&args);
    assert!(!String::from_utf8_lossy(&out.stdout).contains("WARNING"));
    let files = ["points.csv", "boundary.csv", "duration-boundary.csv"];
    let read = |dir: &std::path::Path, f: &str| std::fs::read(dir.join(f)).unwrap();
    for f in files {
        assert_eq!(read(&merged, f), read(&whole, f), "{f}");
    }
    assert_eq!(
        String::from_utf8(read(&whole, "points.csv"))
            .unwrap()
            .lines()
            .count(),
        51
    );
    // Overlapping inputs: a shard with the whole sweep merges to the whole sweep (each
    // point once); the same folder twice is refused; a point held twice with different
    // results is refused.
    let overlap = base.join("overlap");
    sagtrip_ok(&[
        "merge",
        &folders[0],
        whole.to_str().unwrap(),
        "--out",
        overlap.to_str().unwrap(),
    ]);
    assert_eq!(read(&overlap, "points.csv"), read(&whole, "points.csv"));
    sagtrip_fails(
        &[
            "merge",
            &folders[0],
            &folders[0],
            "--out",
            overlap.to_str().unwrap(),
        ],
        "more than once",
    );
    let altered = base.join("altered");
    std::fs::create_dir_all(&altered).unwrap();
    for f in [
        "sweep-settings.json",
        "boundary.csv",
        "duration-boundary.csv",
    ] {
        std::fs::copy(whole.join(f), altered.join(f)).unwrap();
    }
    let text = String::from_utf8(read(&whole, "points.csv")).unwrap();
    let changed = text.replacen(",trips,", ",rides-through,", 1);
    std::fs::write(altered.join("points.csv"), changed).unwrap();
    sagtrip_fails(
        &[
            "merge",
            whole.to_str().unwrap(),
            altered.to_str().unwrap(),
            "--out",
            overlap.to_str().unwrap(),
        ],
        "different results",
    );
    // The same command resumes the finished folder: nothing runs again, nothing changes.
    let before: Vec<Vec<u8>> = files.iter().map(|f| read(&whole, f)).collect();
    run(&["--out", whole.to_str().unwrap(), "--resume"]);
    for (f, b) in files.iter().zip(&before) {
        assert_eq!(&read(&whole, f), b, "{f}");
    }
}

#[test]
fn detect_reports_the_events_of_a_synthesised_recording() {
    let wav = temp_path("mixed.wav");
    sagtrip_ok(&[
        "synth",
        "dip:40%:10cyc;gap:1s;swell:125%:20cyc;gap:500ms;interrupt:60cyc",
        "--out",
        wav.to_str().unwrap(),
        "--format",
        "int24",
    ]);
    let csv = temp_path("events.csv");
    let png = temp_path("events.png");
    let out = sagtrip_ok(&[
        "detect",
        wav.to_str().unwrap(),
        "--calibrate",
        "230V",
        "--json",
        "--out",
        csv.to_str().unwrap(),
        "--plot",
        png.to_str().unwrap(),
    ]);
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let events = v["events"].as_array().unwrap();
    let kinds: Vec<&str> = events.iter().map(|e| e["kind"].as_str().unwrap()).collect();
    assert_eq!(kinds, ["dip", "swell", "interruption"]);
    // EN 50160:2010 dip table: a 40% residual is row C (70 > u >= 40); the 10-cycle dip
    // reads 210 ms by the IEC 61000-4-30 method, column 2 (200 ms < t <= 500 ms).
    assert_eq!(events[0]["level_pct"], 40.0);
    assert_eq!(events[0]["en_50160"], "C2");
    assert_eq!(events[1]["en_50160"], "S1");
    assert_eq!(events[2]["ieee_1159"], "momentary interruption");
    assert_eq!(std::fs::read_to_string(&csv).unwrap().lines().count(), 4);
    let bytes = std::fs::read(&png).unwrap();
    assert_eq!(&bytes[..8], b"\x89PNG\r\n\x1a\n");
    // Without a scale a WAV recording is refused.
    sagtrip_fails(&["detect", wav.to_str().unwrap()], "--volts-per-full-scale");
}

#[test]
fn replay_reports_each_event_and_the_nuisance_trips() {
    let wav = temp_path("replay.wav");
    sagtrip_ok(&[
        "synth",
        "dip:40%:10cyc;gap:1s;dip:95%:20cyc",
        "--out",
        wav.to_str().unwrap(),
        "--tail",
        "40cyc",
    ]);
    let svg = temp_path("replay.svg");
    let out = sagtrip_ok(&[
        "replay",
        wav.to_str().unwrap(),
        "--calibrate",
        "230V",
        "--json",
        "--plot",
        svg.to_str().unwrap(),
    ]);
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    // The 40% dip is detected and trips the guard; the 95% one is not an event at all.
    assert_eq!(v["summary"]["events"], 1);
    assert_eq!(v["summary"]["events_tripped"], 1);
    assert_eq!(v["summary"]["nuisance_trips"], 0);
    assert!(v["events"][0]["trip_latency_ms"].as_f64().unwrap() > 30.0);
    let text = std::fs::read_to_string(&svg).unwrap();
    for label in [
        "Urms(1/2)",
        "dip threshold 90%",
        "protector trips",
        "protector reconnects",
        "event, protector tripped",
        "time into the recording (s)",
        "upper curve (prohibited region above)",
    ] {
        assert!(text.contains(label), "{label}");
    }
    // The latencies count from the point-on-wave onset, as `run` counts: the guard's
    // 40% dip trips in 66 ms there (10 ms more than from the Urms(1/2) start).
    assert_eq!(v["events"][0]["latencies_from"], "point-on-wave");
    let trip = v["events"][0]["trip_latency_ms"].as_f64().unwrap();
    let run = sagtrip_ok(&["run", "--event", "dip:40%:10cyc", "--json"]);
    let run: serde_json::Value = serde_json::from_slice(&run.stdout).unwrap();
    let expected = run["trip_latency_ms"].as_f64().unwrap();
    assert!(
        (trip - expected).abs() < 0.2,
        "replay {trip} ms, run {expected} ms"
    );
}

#[test]
fn thresholds_reports_both_sides_as_json_and_refuses_a_zero_resolution() {
    let plot = temp_path("thresholds.svg");
    let out = sagtrip_ok(&[
        "thresholds",
        "--resolution",
        "1V",
        "--hold",
        "1.5s",
        "--ramp",
        "3s",
        "--json",
        "--plot",
        plot.to_str().unwrap(),
    ]);
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    for side in ["under", "over"] {
        for field in ["trip", "reset"] {
            let volts = v[side][field]["volts"].as_f64().unwrap();
            let (lo, hi) = (
                v[side][field]["bracket_v"][0].as_f64().unwrap(),
                v[side][field]["bracket_v"][1].as_f64().unwrap(),
            );
            // The coarse resolution asked for is met (the value is the bracket's middle).
            assert!(hi - lo <= 1.0 + 1e-9, "{side} {field}: {lo} .. {hi}");
            assert!((volts - 0.5 * (lo + hi)).abs() < 1e-9);
        }
        assert!(v[side]["ramp"]["trip_v"].as_f64().is_some());
    }
    // Under-voltage below nominal, over-voltage above (230 V).
    assert!(v["under"]["trip"]["volts"].as_f64().unwrap() < 230.0);
    assert!(v["over"]["trip"]["volts"].as_f64().unwrap() > 230.0);
    let svg = std::fs::read_to_string(&plot).unwrap();
    assert!(svg.contains("trip (from normal)") && svg.contains("nominal 230 V"));
    sagtrip_fails(&["thresholds", "--resolution", "0V"], "--resolution");
}

#[test]
fn table_runs_a_plan_file_and_writes_markdown_and_csv() {
    let md = temp_path("table.md");
    let csv = temp_path("table.csv");
    let out = sagtrip_ok(&[
        "table",
        "--plan",
        concat!(
            env!("CARGO_MANIFEST_DIR"),
            "/examples/plans/quick-check.toml"
        ),
        "--phases",
        "0,180",
        "--markdown",
        md.to_str().unwrap(),
        "--csv",
        csv.to_str().unwrap(),
        "--quiet",
    ]);
    let stdout = String::from_utf8_lossy(&out.stdout);
    assert!(
        stdout.contains("| deep dip | IEC 61000-4-11 Table 1 (dips) | `dip:40%:10cyc` | trips |")
    );
    assert!(stdout.contains("0°, 180° start phase; 6 simulated runs"));
    let written = std::fs::read_to_string(&md).unwrap();
    assert!(stdout.starts_with(&written));
    // The datasheet table carries the safety caution, once.
    assert_eq!(written.matches(sagtrip::CAUTION).count(), 1);
    assert_eq!(stdout.matches(sagtrip::CAUTION).count(), 1);
    let lines: Vec<String> = std::fs::read_to_string(&csv)
        .unwrap()
        .lines()
        .map(String::from)
        .collect();
    assert_eq!(lines.len(), 4);
    assert!(lines[0].starts_with("test,source,event,outcome,trip_min_ms"));
    assert!(lines[3].starts_with("generator swell,\"site survey, feeder 3\",swell:125%:1s,trips,"));
    // A mistake in the plan is reported with its place, before any simulation.
    let plan = temp_path("bad-plan.toml");
    std::fs::write(&plan, "[[test]]\nname = \"x\"\nevent = \"dip:140%:1cyc\"\n").unwrap();
    let err = sagtrip_fails(
        &["table", "--plan", plan.to_str().unwrap()],
        "bad-plan.toml:3:",
    );
    assert!(err.contains("test.1.event"), "{err}");
}

#[test]
fn table_writes_a_self_contained_html_report() {
    let html = temp_path("report.html");
    sagtrip_ok(&[
        "table",
        "--plan",
        concat!(
            env!("CARGO_MANIFEST_DIR"),
            "/examples/plans/quick-check.toml"
        ),
        "--phases",
        "0",
        "--html",
        html.to_str().unwrap(),
        "--map-durations",
        "3",
        "--quiet",
    ]);
    let page = std::fs::read_to_string(&html).unwrap();
    assert!(page.starts_with("<!DOCTYPE html>"));
    assert!(page.contains("<td>deep dip</td>"));
    assert!(page.contains("Mains voltage can kill"));
    // The trip map is inline; nothing is fetched from a network (the only address is the
    // SVG namespace name, which browsers never fetch).
    assert!(page.contains("<svg") && page.contains("Trip map"));
    assert!(!page.contains("<?xml"));
    assert!(!page.contains("<script") && !page.contains("<link"));
    assert!(!page.contains("src=\"http"));
}

#[test]
fn table_over_tolerance_cases_is_reproducible() {
    let circuit = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/examples/guard-230v-tolerances.toml"
    );
    let plan = temp_path("tiny-plan.toml");
    std::fs::write(
        &plan,
        "thresholds = false\nphases = [0]\n[[test]]\nname = \"deep dip\"\nevent = \"dip:40%:10cyc\"\n",
    )
    .unwrap();
    let csv = |name: &str, extra: &[&str]| {
        let path = temp_path(name);
        let mut args = vec![
            "table",
            "--circuit",
            circuit,
            "--plan",
            plan.to_str().unwrap(),
            "--csv",
            path.to_str().unwrap(),
            "--quiet",
        ];
        args.extend_from_slice(extra);
        let out = sagtrip_ok(&args);
        (
            String::from_utf8_lossy(&out.stdout).to_string(),
            std::fs::read_to_string(path).unwrap(),
        )
    };
    let (text, one) = csv("mc1.csv", &["--monte-carlo", "3", "--seed", "5"]);
    assert!(text.contains("4 tolerance cases (nominal and 3 Monte Carlo samples of 4 values"));
    let (_, two) = csv("mc2.csv", &["--monte-carlo", "3", "--seed", "5"]);
    assert_eq!(one, two);
    let (text, _) = csv("corners.csv", &["--corners"]);
    assert!(text.contains("17 tolerance cases (nominal and every corner of 4 values)"));
    // Screening for one value: 3 cases, and a screening section listing all four values.
    let (text, _) = csv("screened.csv", &["--corners", "--screen", "1"]);
    assert!(
        text.contains("3 tolerance cases (nominal and every corner of the 1 value kept"),
        "{text}"
    );
    assert!(text.contains("## Tolerance screening"));
    assert_eq!(text.matches(" | varied |").count(), 1);
    assert_eq!(text.matches(" | as written |").count(), 3);
    for (bad, message) in [
        (vec!["--screen", "2"], "--screen goes with --corners"),
        (vec!["--corners", "--screen", "9"], "keep from 1 to 8"),
    ] {
        let mut args = vec!["table", "--circuit", circuit, "--quiet"];
        args.extend_from_slice(&bad);
        sagtrip_fails(&args, message);
    }
    // Tolerance cases need tolerances.
    sagtrip_fails(
        &["table", "--corners", "--plan", plan.to_str().unwrap()],
        "no values with a tolerance",
    );
}

#[test]
fn every_event_command_refuses_a_guard_that_never_connects_the_load() {
    // A pick-up current (40 mA) above what the coil can carry (12 V / 400 ohm = 30 mA, Ohm's
    // law): the load is never connected, so no command may give a verdict.
    let text = sagtrip::builtin::REFERENCE_GUARD.replace("\"22mA\"", "\"40mA\"");
    let path = temp_path("never-connects.toml");
    std::fs::write(&path, text).unwrap();
    let circuit = path.to_str().unwrap();
    let limit = ["--power-up-limit", "1s"];
    let expected = "relay `relay` did not connect the load";
    let recording = temp_path("never-connects.wav");
    sagtrip_ok(&[
        "synth",
        "dip:40%:10cyc",
        "--out",
        recording.to_str().unwrap(),
    ]);
    for command in [
        vec!["run", "--event", "dip:40%:10cyc"],
        vec!["sweep", "--levels", "0:40:40", "--duration-count", "2"],
        vec!["table"],
        vec!["thresholds"],
        vec!["replay", recording.to_str().unwrap()],
    ] {
        let mut args = command.clone();
        args.extend(["--circuit", circuit]);
        args.extend(limit);
        let err = sagtrip_fails(&args, expected);
        assert!(
            err.contains("1 s") && err.contains("--power-up-limit"),
            "{err}"
        );
    }
}

#[test]
fn detect_takes_the_declared_supply_from_the_recording() {
    // A 120 V, 60 Hz recording calibrated to 120 V: declared 120 V / 60 Hz without
    // --nominal, so the 40% dip is found as a 40% dip and nothing else.
    let wav = temp_path("mains-120.wav");
    sagtrip_ok(&[
        "synth",
        "dip:40%:10cyc",
        "--nominal",
        "120V/60Hz",
        "--out",
        wav.to_str().unwrap(),
    ]);
    let out = sagtrip_ok(&[
        "detect",
        wav.to_str().unwrap(),
        "--calibrate",
        "120V",
        "--json",
    ]);
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["declared_rms_v"], 120.0);
    assert_eq!(v["frequency_hz"], 60.0);
    let events = v["events"].as_array().unwrap();
    assert_eq!(events.len(), 1, "{events:?}");
    assert_eq!(events[0]["kind"], "dip");
    // IEC 61000-4-30 class A: residual within 0.2% of the declared voltage (from memory).
    let level = events[0]["level_pct"].as_f64().unwrap();
    assert!((level - 40.0).abs() < 0.2, "{level}");
    // The frequency over the recording's interval, the dip's cycles left out: exactly the
    // synthesised 60 Hz.
    let f = &v["measured_frequency_hz"];
    for k in ["min", "max"] {
        assert!((f[k].as_f64().unwrap() - 60.0).abs() < 1e-3, "{f}");
    }
    // A declared 50 Hz supply does not fit a 60 Hz recording (more than 5% away).
    sagtrip_fails(
        &[
            "detect",
            wav.to_str().unwrap(),
            "--calibrate",
            "120V",
            "--nominal",
            "120V/50Hz",
        ],
        "more than 5%",
    );
}

#[test]
fn exit_codes_tell_input_mistakes_from_failed_runs() {
    // 0 success, 1 a run that could not give an answer, 2 a mistake in the input
    // (the README's table of exit codes).
    assert_eq!(sagtrip(&["presets"]).status.code(), Some(0));
    assert_eq!(sagtrip(&["run", "--bogus"]).status.code(), Some(2));
    let missing = sagtrip(&["run", "--circuit", "no-such-circuit.toml"]);
    assert_eq!(missing.status.code(), Some(2));
    assert_eq!(
        sagtrip(&["sweep", "--levels", "abc"]).status.code(),
        Some(2)
    );
    let text = sagtrip::builtin::REFERENCE_GUARD.replace("\"22mA\"", "\"40mA\"");
    let path = temp_path("exit-never-connects.toml");
    std::fs::write(&path, text).unwrap();
    let never = sagtrip(&[
        "run",
        "--event",
        "dip:40%:10cyc",
        "--circuit",
        path.to_str().unwrap(),
        "--power-up-limit",
        "1s",
    ]);
    assert_eq!(never.status.code(), Some(1));
}

#[test]
fn no_output_may_replace_an_input() {
    // Writing a trace over the circuit file, events over the recording, or a merged sweep
    // into one of its shards would destroy the input: refused before any work, the input
    // unchanged, through a link or a roundabout path as well.
    let dir = temp_path("no-overwrite");
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(dir.join("sub")).unwrap();
    let circuit = dir.join("guard.toml");
    std::fs::write(&circuit, sagtrip::builtin::REFERENCE_GUARD).unwrap();
    let c = circuit.to_str().unwrap();
    let roundabout = dir.join("sub").join("..").join("guard.toml");
    let link = dir.join("link.toml");
    #[cfg(unix)]
    std::os::unix::fs::symlink(&circuit, &link).unwrap();
    let mut targets = vec![c.to_string(), roundabout.to_str().unwrap().to_string()];
    if cfg!(unix) {
        targets.push(link.to_str().unwrap().to_string());
    }
    for target in &targets {
        let out = sagtrip(&["run", "--circuit", c, "--trace", target]);
        assert_eq!(out.status.code(), Some(2), "{target}");
        assert!(String::from_utf8_lossy(&out.stderr).contains("would replace it"));
        let out = sagtrip(&[
            "run",
            "--circuit",
            c,
            "--event",
            "dip:40%:10cyc",
            "--plot",
            target,
        ]);
        assert_eq!(out.status.code(), Some(2), "{target}");
    }
    assert_eq!(
        std::fs::read_to_string(&circuit).unwrap(),
        sagtrip::builtin::REFERENCE_GUARD
    );
    let wav = dir.join("rec.wav");
    let w = wav.to_str().unwrap();
    sagtrip_ok(&["synth", "dip:40%:10cyc", "--out", w]);
    let before = std::fs::read(&wav).unwrap();
    sagtrip_fails(
        &["detect", w, "--calibrate", "230V", "--out", w],
        "would replace it",
    );
    sagtrip_fails(
        &["replay", w, "--calibrate", "230V", "--trace", w],
        "would replace it",
    );
    assert_eq!(std::fs::read(&wav).unwrap(), before);
    let shard = dir.join("shard");
    sagtrip_fails(
        &[
            "merge",
            shard.to_str().unwrap(),
            "--out",
            shard.to_str().unwrap(),
        ],
        "would replace it",
    );
}

#[test]
fn every_report_with_numbers_carries_the_caution() {
    // Text reports end with it; JSON stays valid JSON and the caution goes to the error
    // stream.
    let out = sagtrip_ok(&["run", "--event", "interrupt:10cyc"]);
    let text = String::from_utf8(out.stdout).unwrap();
    assert!(text.trim_end().ends_with(sagtrip::CAUTION), "{text}");
    let out = sagtrip_ok(&["run", "--event", "interrupt:10cyc", "--json"]);
    let _: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert!(String::from_utf8_lossy(&out.stderr).contains(sagtrip::CAUTION));
}

#[test]
fn a_sweep_does_not_resume_over_an_edited_circuit() {
    // The same path, other contents: the old points must not be joined to the new circuit.
    let dir = temp_path("resume-edited");
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).unwrap();
    let circuit = dir.join("guard.toml");
    std::fs::write(&circuit, sagtrip::builtin::REFERENCE_GUARD).unwrap();
    let out = dir.join("study");
    let args = [
        "sweep",
        "--circuit",
        circuit.to_str().unwrap(),
        "--levels",
        "0:40:40",
        "--durations",
        "1cyc:100ms",
        "--duration-count",
        "2",
        "--phases",
        "0",
        "--no-refine",
        "--quiet",
        "--out",
        out.to_str().unwrap(),
    ];
    sagtrip_ok(&args);
    let mut resume = args.to_vec();
    resume.push("--resume");
    sagtrip_ok(&resume);
    let edited = sagtrip::builtin::REFERENCE_GUARD.replace("\"22mA\"", "\"21mA\"");
    assert_ne!(edited, sagtrip::builtin::REFERENCE_GUARD);
    std::fs::write(&circuit, edited).unwrap();
    let err = sagtrip_fails(&resume, "other settings");
    assert!(err.contains("--resume needs the same circuit"), "{err}");
}

#[test]
fn a_sweep_killed_mid_run_resumes_to_the_uninterrupted_files() {
    // Killed (SIGKILL on Unix) while points are being appended, twice, then resumed with the
    // same command: the files are byte for byte those of an uninterrupted sweep.
    let base = temp_path("killed");
    let _ = std::fs::remove_dir_all(&base);
    let grid = [
        "sweep",
        "--levels",
        "0:80:20",
        "--durations",
        "1cyc:1s",
        "--duration-count",
        "5",
        "--phases",
        "0,90",
        "--no-refine",
        "--quiet",
    ];
    let whole = base.join("whole");
    let killed = base.join("killed");
    let mut args = grid.to_vec();
    args.extend(["--out", whole.to_str().unwrap()]);
    sagtrip_ok(&args);
    for (k, wait_ms) in [(0, 700), (1, 500)] {
        let mut args = grid.to_vec();
        args.extend(["--out", killed.to_str().unwrap()]);
        if k > 0 {
            args.push("--resume");
        }
        let mut child = Command::new(env!("CARGO_BIN_EXE_sagtrip"))
            .args(&args)
            .current_dir(env!("CARGO_MANIFEST_DIR"))
            .stdout(std::process::Stdio::null())
            .stderr(std::process::Stdio::null())
            .spawn()
            .unwrap();
        std::thread::sleep(std::time::Duration::from_millis(wait_ms));
        let _ = child.kill();
        let _ = child.wait();
    }
    let mut args = grid.to_vec();
    args.extend(["--out", killed.to_str().unwrap(), "--resume"]);
    sagtrip_ok(&args);
    for f in ["points.csv", "boundary.csv", "duration-boundary.csv"] {
        assert_eq!(
            std::fs::read(killed.join(f)).unwrap(),
            std::fs::read(whole.join(f)).unwrap(),
            "{f}"
        );
    }
}

#[test]
fn absurd_spans_and_counts_are_refused_at_parse_time() {
    // Each of these ran forever or exhausted memory; each must end at once with the option
    // (or the event's field) and the allowed range.
    for (args, expected) in [
        (
            vec!["run", "--event", "interrupt:1e300s"],
            "at most 86400 s",
        ),
        (
            vec!["run", "--event", "swell:120%:1e12cyc"],
            "at most 86400 s",
        ),
        (
            vec!["run", "--duration", "1e300s"],
            "--duration 1e300s: allowed",
        ),
        (
            vec!["run", "--max-step", "1e-15s"],
            "--max-step 1e-15s: allowed",
        ),
        (
            vec!["sweep", "--durations", "1cyc:1e300s"],
            "--durations 1e300s: allowed",
        ),
        (vec!["sweep", "--levels", "0:90:1e-12"], "at most 1000"),
        (
            vec!["sweep", "--duration-count", "100000000"],
            "at most 1000",
        ),
        (
            vec!["sweep", "--resolution", "0"],
            "--resolution 0: allowed",
        ),
        (vec!["sweep", "--levels", "nan:90:10"], "--levels nan:90:10"),
        (
            vec![
                "run",
                "--event",
                "dip:40%:10cyc",
                "--nominal",
                "230V/1e-300Hz",
            ],
            "the frequency is allowed from 1 Hz to 1000 Hz",
        ),
    ] {
        refused_as_input(&args, expected);
    }
}

#[test]
fn an_enormous_line_is_not_echoed_whole() {
    // A circuit file whose one bad line holds two megabytes: the error names the place and
    // shows a short window of it, not the whole line.
    let path = temp_path("enormous.toml");
    let text = format!(
        "title = \"x\"\n[part.r]\nkind = \"resistor\"\npins = [\"a\", \"gnd\"]\nresistance = \"{}q\"  # {}\n",
        "9".repeat(1_000_000),
        "x".repeat(1_000_000)
    );
    std::fs::write(&path, text).unwrap();
    let out = sagtrip(&["check", "--circuit", path.to_str().unwrap()]);
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.contains("enormous.toml:5:14: part.r.resistance"),
        "{err}"
    );
    assert!(err.len() < 4000, "{} bytes of error", err.len());
}

#[test]
fn nonsense_thresholds_scales_harmonics_and_phases_are_refused() {
    let wav = temp_path("nonsense.wav");
    let w = wav.to_str().unwrap();
    sagtrip_ok(&["synth", "dip:40%:10cyc", "--out", w]);
    for (args, expected) in [
        (
            vec!["detect", w, "--calibrate", "230V", "--dip", "150"],
            "need 0 < interruption < dip < 100 < swell",
        ),
        (
            vec!["detect", w, "--calibrate", "230V", "--swell", "50"],
            "--swell 50",
        ),
        (
            vec!["detect", w, "--calibrate", "230V", "--hysteresis", "200"],
            "--hysteresis 200",
        ),
        (
            vec!["detect", w, "--calibrate", "230V", "--interruption", "95"],
            "--interruption 95",
        ),
        (
            vec!["detect", w, "--calibrate", "230V", "--dip", "NaN"],
            "--dip NaN",
        ),
        (
            vec!["detect", w, "--calibrate", "0V"],
            "--calibrate 0V: allowed",
        ),
        (
            vec!["detect", w, "--volts-per-full-scale", "0V"],
            "--volts-per-full-scale 0V: allowed",
        ),
        (
            vec!["synth", "dip:40%:10cyc", "--out", w, "--harmonics", "0:5"],
            "orders from 2 to 100",
        ),
        (
            vec![
                "synth",
                "dip:40%:10cyc",
                "--out",
                w,
                "--harmonics",
                "4294967295:1",
            ],
            "orders from 2 to 100",
        ),
        (vec!["sweep", "--phases", "nan"], "--phases nan"),
        (vec!["table", "--phases", "90,nan"], "--phases 90,nan"),
        (
            vec!["run", "--event", "dip:40%:10cyc@nan"],
            "not a phase angle",
        ),
        (
            vec!["run", "--event", "class3-dip-40@nandeg"],
            "not a phase angle",
        ),
        // One phase grammar for every option: `90deg` is read by sweep as by table, so
        // the mistake reported is the next one (the durations, read after power-up).
        (
            vec!["sweep", "--phases", "0,90deg", "--durations", "1s:0.5s"],
            "--durations",
        ),
    ] {
        refused_as_input(&args, expected);
    }
}

#[test]
fn a_mains_at_a_frequency_no_supply_has_is_refused() {
    // 1 MHz is a valid sine for a circuit, but no mains: no verdict is given on it.
    let text = std::fs::read_to_string("examples/guard-230v.toml")
        .unwrap()
        .replace("frequency = \"50Hz\"", "frequency = \"1MHz\"");
    let path = temp_path("megahertz-mains.toml");
    std::fs::write(&path, text).unwrap();
    let out = sagtrip(&[
        "run",
        "--circuit",
        path.to_str().unwrap(),
        "--event",
        "dip:40%:10ms",
    ]);
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{err}");
    assert!(
        err.contains("runs at 1e6 Hz: a mains supply is allowed from 1 to 1000 Hz"),
        "{err}"
    );
}

#[test]
fn events_that_last_no_time_are_refused() {
    // A step of no duration, or shorter than the edge the supply takes to reach its level,
    // makes no event: refused before any simulation, naming the step (common practice: a
    // test generator's dip is at least its rise and fall long).
    let nan_phase = temp_path("nan-phase.toml");
    std::fs::write(
        &nan_phase,
        "phase = \"nan\"\n[[event]]\nkind = \"dip\"\nresidual = \"40%\"\nduration = \"10cyc\"\n",
    )
    .unwrap();
    let zero = temp_path("zero-gap.toml");
    std::fs::write(
        &zero,
        "[[event]]\nkind = \"interrupt\"\nduration = \"10cyc\"\n\
         [[event]]\nkind = \"gap\"\nduration = \"0s\"\n\
         [[event]]\nkind = \"dip\"\nresidual = \"40%\"\nduration = \"5cyc\"\n",
    )
    .unwrap();
    let w = temp_path("no-time.wav");
    for (args, expected) in [
        (
            vec!["run", "--event", "dip:40%:0cyc"],
            "step 1 (`dip:40%:0cyc`) lasts no time",
        ),
        (vec!["run", "--event", "swell:120%:0s"], "lasts no time"),
        (
            vec!["run", "--event", "dip:40%:1e-9s"],
            "shorter than the 5e-6 s edge",
        ),
        (
            vec!["run", "--event", "interrupt:10cyc;gap:0s;dip:40%:5cyc"],
            "step 2 (`gap:0ms`) lasts no time",
        ),
        (
            vec!["run", "--event", "dip:40%:1ms", "--edge", "5ms"],
            "shorter than the 5e-3 s edge",
        ),
        (
            vec!["run", "--event-file", zero.to_str().unwrap()],
            "step 2 (`gap:0ms`) lasts no time",
        ),
        (
            vec!["run", "--event-file", nan_phase.to_str().unwrap()],
            "not a phase angle",
        ),
        (
            vec!["synth", "dip:40%:0cyc", "--out", w.to_str().unwrap()],
            "lasts no time",
        ),
        (
            vec!["sweep", "--durations", "1e-12s:1e-11s"],
            "the shortest event lasts at least",
        ),
    ] {
        refused_as_input(&args, expected);
    }
    assert!(!w.exists(), "no recording is written for a refused event");
}

#[test]
fn an_input_file_over_10_mb_is_refused_before_it_is_read() {
    // A 50 MB one-line circuit took 1.8 GB of memory to check.
    let path = temp_path("huge-circuit.toml");
    std::fs::write(&path, "#".repeat(10_000_001)).unwrap();
    let out = sagtrip(&["check", "--circuit", path.to_str().unwrap()]);
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{err}");
    assert!(
        err.contains("holds 10000001 bytes: at most 10000000"),
        "{err}"
    );
    std::fs::remove_file(&path).unwrap();
}

#[test]
fn a_recording_too_large_to_build_is_refused() {
    // These ran out of memory (a panic) before.
    let w = temp_path("too-large.wav");
    let w = w.to_str().unwrap();
    for (args, expected) in [
        (
            vec!["synth", "dip:40%:10cyc", "--out", w, "--rate", "4294967295"],
            "--rate 4294967295: allowed from 1000 to 1000000",
        ),
        (
            vec!["synth", "dip:40%:86400s", "--out", w],
            "at most 100000000",
        ),
    ] {
        refused_as_input(&args, expected);
    }
}

#[test]
fn negative_values_reach_the_checks_that_name_them() {
    // A value starting with a minus sign is the option's value, checked like any other,
    // not taken for an unknown option.
    for (args, expected) in [
        (
            vec!["run", "--duration", "-1s"],
            "--duration -1s: allowed from",
        ),
        (
            vec!["run", "--max-step", "-1us"],
            "--max-step -1us: allowed from",
        ),
        (
            vec!["thresholds", "--resolution", "-1V"],
            "--resolution -1V",
        ),
        (
            vec!["thresholds", "--resolution", "1e-300V"],
            "--resolution 1e-300V: allowed from 1 mV to 100 V",
        ),
        (vec!["sweep", "--levels", "-10:50:10"], "--levels -10:50:10"),
        (
            vec!["detect", "waveforms/recloser.wav", "--calibrate", "-230V"],
            "--calibrate -230V",
        ),
        (
            vec![
                "detect",
                "waveforms/recloser.wav",
                "--calibrate",
                "230V",
                "--dip",
                "-5",
            ],
            "--dip -5",
        ),
        (
            vec![
                "detect",
                "waveforms/recloser.wav",
                "--calibrate",
                "230V",
                "--channel",
                "-1",
            ],
            "--channel",
        ),
    ] {
        refused_as_input(&args, expected);
    }
}

#[test]
fn full_steps_turns_the_cycle_skipping_off() {
    // The same event with and without the shortcut: plain stepping skips nothing and
    // agrees within 0.1 ms (the accuracy sagtrip states for its timings).
    let json = |extra: &[&str]| -> serde_json::Value {
        let mut args = vec!["run", "--event", "dip:80%:250cyc", "--json"];
        args.extend(extra);
        let out = sagtrip_ok(&args);
        let text = String::from_utf8_lossy(&out.stdout).to_string();
        serde_json::from_str(&text[..=text.rfind('}').unwrap()]).unwrap()
    };
    let (fast, full) = (json(&[]), json(&["--full-steps"]));
    assert!(fast["stats"]["skipped_s"].as_f64().unwrap() > 1.0);
    assert_eq!(full["stats"]["skipped_s"].as_f64().unwrap(), 0.0);
    for key in ["trip_latency_ms", "restore_latency_ms"] {
        let (a, b) = (fast[key].as_f64().unwrap(), full[key].as_f64().unwrap());
        assert!((a - b).abs() <= 0.1, "{key}: {a} vs {b}");
    }
}

#[test]
fn new_writes_bundled_circuits_that_check_and_run_as_the_built_in_one() {
    let list = String::from_utf8_lossy(&sagtrip_ok(&["new", "--list"]).stdout).to_string();
    let names: Vec<String> = sagtrip::builtin::BUNDLED
        .iter()
        .map(|b| b.name.to_string())
        .collect();
    for name in &names {
        assert!(list.contains(name.as_str()), "{list}");
        let path = temp_path(&format!("new-{name}.toml"));
        let _ = std::fs::remove_file(&path);
        sagtrip_ok(&["new", path.to_str().unwrap(), "--from", name]);
        sagtrip_ok(&["check", "--circuit", path.to_str().unwrap()]);
    }
    // The written guard gives the built-in guard's results, number for number.
    let path = temp_path("new-guard-230v.toml");
    let json = |args: &[&str]| -> serde_json::Value {
        let text = String::from_utf8_lossy(&sagtrip_ok(args).stdout).to_string();
        let mut v: serde_json::Value =
            serde_json::from_str(&text[..=text.rfind('}').unwrap()]).unwrap();
        for key in ["circuit", "wall_time_s"] {
            v.as_object_mut().unwrap().remove(key);
        }
        v
    };
    let event = ["run", "--event", "dip:40%:10cyc", "--json"];
    let built_in = json(&event);
    let mut written_args = event.to_vec();
    written_args.extend(["--circuit", path.to_str().unwrap()]);
    assert_eq!(json(&written_args), built_in);
    // It never replaces a file, and names an unknown circuit's alternatives.
    sagtrip_fails(&["new", path.to_str().unwrap()], "exists");
    sagtrip_fails(
        &[
            "new",
            temp_path("new-x.toml").to_str().unwrap(),
            "--from",
            "nope",
        ],
        "there are: guard-230v",
    );
}

#[test]
fn set_changes_a_value_as_if_written_in_the_file() {
    let restore = |extra: &[&str]| -> (f64, String) {
        let mut args = vec!["run", "--event", "dip:40%:10cyc", "--json"];
        args.extend(extra);
        let text = String::from_utf8_lossy(&sagtrip_ok(&args).stdout).to_string();
        let v: serde_json::Value =
            serde_json::from_str(&text[..=text.rfind('}').unwrap()]).unwrap();
        (
            v["restore_latency_ms"].as_f64().unwrap(),
            v["circuit"].as_str().unwrap().to_string(),
        )
    };
    let (base, _) = restore(&[]);
    let (bigger, name) = restore(&["--set", "c_delay.capacitance=22u"]);
    // The reconnection delay is an RC charge to a threshold, so it scales with C: 22 uF
    // against 10 uF gives 2.2 times the delay (first-order circuit theory, from memory),
    // within 5% (the comparator's and relay's own delays do not scale).
    let ratio = bigger / base;
    assert!((ratio - 2.2).abs() < 0.11, "{bigger} / {base} = {ratio}");
    assert!(
        name.contains("with --set c_delay.capacitance=22u"),
        "{name}"
    );
    // Checked as if written: the part and field are named; a field the file leaves out is
    // added; a part that does not exist lists the parts.
    sagtrip_fails(
        &["check", "--set", "c_delay.capacitance=-1u"],
        "part.c_delay.capacitance: must be positive",
    );
    sagtrip_ok(&["check", "--set", "c_delay.initial_voltage=1V"]);
    sagtrip_fails(
        &["check", "--set", "nope.x=1"],
        "no part `nope` in the circuit",
    );
    sagtrip_fails(&["check", "--set", "c_delay"], "is not PART.FIELD=VALUE");
}
