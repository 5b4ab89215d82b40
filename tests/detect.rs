//! Detection of dips, swells and interruptions against synthetic recordings with known
//! events (IEC 61000-4-30: duration within one half cycle, residual within 0.5% of the
//! declared voltage), and recordings read back from files.

mod common;

use sagtrip::detect::{detect, DisturbanceKind, Thresholds};
use sagtrip::profile::{parse_spec, DEFAULT_EDGE_S};
use sagtrip::synth::{samples, SampleFormat, SynthOptions};

const RATE: u32 = 10_000;

fn synthetic(spec: &str, lead_s: f64, harmonics: bool) -> Vec<f64> {
    let profile = parse_spec(spec, DEFAULT_EDGE_S).unwrap();
    let options = SynthOptions {
        rms_v: 230.0,
        frequency_hz: 50.0,
        sample_rate: RATE,
        lead_s,
        tail_s: 1.0,
        volts_per_full_scale: 1000.0,
        format: SampleFormat::Float32,
        harmonics: Vec::new(),
        noise: 0.0,
    };
    let mut v = samples(&profile, &options);
    if harmonics {
        add_harmonics_and_noise(&mut v);
    }
    v
}

/// 5% third and 3% fifth harmonic and about 1% noise (a deterministic generator).
fn add_harmonics_and_noise(v: &mut [f64]) {
    let mut seed: u64 = 7;
    let amplitude = 230.0 * std::f64::consts::SQRT_2;
    for (k, x) in v.iter_mut().enumerate() {
        let t = k as f64 / f64::from(RATE);
        let w = 2.0 * std::f64::consts::PI * 50.0;
        seed = seed
            .wrapping_mul(6_364_136_223_846_793_005)
            .wrapping_add(1_442_695_040_888_963_407);
        let noise = ((seed >> 11) as f64 / (1u64 << 53) as f64 - 0.5) * 2.0 * 0.01 * amplitude;
        *x += 0.05 * amplitude * (3.0 * w * t).sin()
            + 0.03 * amplitude * (5.0 * w * t + 0.3).sin()
            + noise;
    }
}

#[test]
fn known_dips_swells_and_interruptions_are_found_within_the_method_accuracy() {
    // (spec, kind, level %, duration s): levels and durations of the applied events.
    let cases = [
        ("dip:40%:10cyc", DisturbanceKind::Dip, 40.0, 0.2),
        ("dip:70%:25cyc@90", DisturbanceKind::Dip, 70.0, 0.5),
        ("interrupt:250cyc", DisturbanceKind::Interruption, 0.0, 5.0),
        ("swell:120%:25cyc", DisturbanceKind::Swell, 120.0, 0.5),
        ("dip:80%:3cyc@45", DisturbanceKind::Dip, 80.0, 0.06),
    ];
    for (spec, kind, level, duration) in cases {
        let v = synthetic(spec, 0.5, false);
        let d = detect(&v, f64::from(RATE), 230.0, 50.0, Thresholds::default());
        assert_eq!(d.events.len(), 1, "{spec}: {:?}", d.events);
        let e = &d.events[0];
        assert_eq!(e.kind, kind, "{spec}");
        // IEC 61000-4-30 Class A: residual voltage within 0.2% of the declared voltage; we
        // ask 0.5% (issue 6). Duration within one half cycle (10 ms).
        assert!(
            (e.level_pct - level).abs() < 0.5,
            "{spec}: level {}",
            e.level_pct
        );
        assert!(
            (e.duration_s - duration).abs() <= 0.010 + 1e-6,
            "{spec}: duration {}",
            e.duration_s
        );
        // The event starts within the first cycle after the onset (0.5 s + phase).
        assert!(
            e.start_s >= 0.5 && e.start_s <= 0.5 + 0.025,
            "{spec}: start {}",
            e.start_s
        );
    }
}

#[test]
fn a_clean_supply_with_harmonics_and_noise_has_no_events() {
    let v = synthetic("gap:2s", 0.5, true);
    let d = detect(&v, f64::from(RATE), 230.0, 50.0, Thresholds::default());
    assert!(d.events.is_empty(), "{:?}", d.events);
    // The frequency is found cycle by cycle.
    let mean = d.cycles.iter().map(|c| c.frequency_hz).sum::<f64>() / d.cycles.len() as f64;
    assert!((mean - 50.0).abs() < 0.01, "{mean}");
    // The fundamental's RMS is the 230 V of the sine, the harmonics excluded.
    let c = &d.cycles[10];
    assert!(
        (c.fundamental_rms_v - 230.0).abs() < 2.0,
        "{}",
        c.fundamental_rms_v
    );
    // A dip in the same conditions is still found with the same accuracy.
    let v = synthetic("dip:40%:10cyc", 0.5, true);
    let d = detect(&v, f64::from(RATE), 230.0, 50.0, Thresholds::default());
    assert_eq!(d.events.len(), 1, "{:?}", d.events);
    assert!(
        (d.events[0].level_pct - 40.0).abs() < 1.0,
        "{}",
        d.events[0].level_pct
    );
}

#[test]
fn a_half_cycle_interruption_reads_as_the_method_predicts() {
    // Derived from the definition (IEC 61000-4-30 window): with the window aligned to zero
    // crossings, a 0% half-cycle dip at a zero crossing is seen by one window holding half a
    // cycle of each, sqrt((1 + 0^2)/2) = 70.7%, and lasts one half cycle more than applied.
    let v = synthetic("interrupt:0.5cyc", 0.5, false);
    let d = detect(&v, f64::from(RATE), 230.0, 50.0, Thresholds::default());
    assert_eq!(d.events.len(), 1);
    let e = &d.events[0];
    assert_eq!(e.kind, DisturbanceKind::Dip);
    assert!((e.level_pct - 70.71).abs() < 0.3, "{}", e.level_pct);
    assert!((e.duration_s - 0.02).abs() < 0.002, "{}", e.duration_s);
}

#[test]
fn a_phase_jump_at_onset_is_flagged() {
    // A dip to 50% whose sine also jumps by 30 degrees at onset.
    let rate = f64::from(RATE);
    let amplitude = 230.0 * std::f64::consts::SQRT_2;
    let w = 2.0 * std::f64::consts::PI * 50.0;
    let v: Vec<f64> = (0..(2.0 * rate) as usize)
        .map(|k| {
            let t = k as f64 / rate;
            if (0.5..0.7).contains(&t) {
                0.5 * amplitude * (w * t + 30f64.to_radians()).sin()
            } else {
                amplitude * (w * t).sin()
            }
        })
        .collect();
    let d = detect(&v, rate, 230.0, 50.0, Thresholds::default());
    assert_eq!(d.events.len(), 1);
    let jump = d.events[0].phase_jump_deg.expect("a phase jump");
    assert!((jump - 30.0).abs() < 3.0, "{jump}");
    // Without a jump, nothing is flagged.
    let v = synthetic("dip:50%:10cyc", 0.5, false);
    let d = detect(&v, rate, 230.0, 50.0, Thresholds::default());
    assert_eq!(d.events[0].phase_jump_deg, None);
}

/// Writes `volts` as a WAV file of `format` and reads it back through the recording reader.
fn wav_round_trip(volts: &[f64], format: SampleFormat, name: &str) -> Vec<f64> {
    let options = SynthOptions {
        rms_v: 230.0,
        frequency_hz: 50.0,
        sample_rate: RATE,
        lead_s: 0.0,
        tail_s: 0.0,
        volts_per_full_scale: 650.0,
        format,
        harmonics: Vec::new(),
        noise: 0.0,
    };
    let bytes = sagtrip::synth::wav_bytes(volts, &options).unwrap();
    let path =
        std::env::temp_dir().join(format!("sagtrip-detect-{}-{name}.wav", std::process::id()));
    std::fs::write(&path, bytes).unwrap();
    let samples =
        sagtrip::recording::open(&path, 0, &sagtrip::recording::CsvColumns::default()).unwrap();
    assert_eq!(samples.sample_rate, f64::from(RATE));
    samples.map(|s| s.unwrap() * 650.0).collect()
}

#[test]
fn wav_recordings_round_trip_in_every_sample_format() {
    let v = synthetic("dip:40%:10cyc", 0.5, false);
    for (format, name, resolution) in [
        (SampleFormat::Int16, "i16", 650.0 / 32768.0),
        (SampleFormat::Int24, "i24", 650.0 / 8_388_608.0),
        (SampleFormat::Float32, "f32", 1e-4),
    ] {
        let back = wav_round_trip(&v, format, name);
        assert_eq!(back.len(), v.len());
        let worst = back
            .iter()
            .zip(&v)
            .map(|(a, b)| (a - b).abs())
            .fold(0.0, f64::max);
        assert!(worst <= 1.5 * resolution, "{name}: {worst}");
        // And the detection on the read-back samples still finds the dip at 40%.
        let d = detect(&back, f64::from(RATE), 230.0, 50.0, Thresholds::default());
        assert_eq!(d.events.len(), 1);
        assert!((d.events[0].level_pct - 40.0).abs() < 0.5);
    }
}

#[test]
fn csv_recordings_with_odd_but_valid_layout_are_read() {
    // Semicolons, quoted headers in another order, comments, blank lines, padding.
    let path = std::env::temp_dir().join(format!("sagtrip-detect-{}-odd.csv", std::process::id()));
    let mut text = String::from("# logger export\n\n \"Voltage\" ; \"Time\" ; \"note\"\n");
    for k in 0..2000 {
        let t = f64::from(k) / 10_000.0;
        text += &format!(
            " {:.6} ;{t:.6}; x\n",
            325.0 * (2.0 * std::f64::consts::PI * 50.0 * t).sin()
        );
        if k == 500 {
            text += "# a comment in the middle\n\n";
        }
    }
    std::fs::write(&path, text).unwrap();
    let columns = sagtrip::recording::CsvColumns {
        time: "time".into(),
        voltage: "voltage".into(),
    };
    let samples = sagtrip::recording::open(&path, 0, &columns).unwrap();
    assert!((samples.sample_rate - 10_000.0).abs() < 1e-6);
    let v: Vec<f64> = samples.map(|s| s.unwrap()).collect();
    assert_eq!(v.len(), 2000);
    // The crest of the 50 Hz sine, 5 ms in.
    assert!((v[50] - 325.0).abs() < 1e-3, "{}", v[50]);
}

#[test]
fn bad_recordings_are_refused_with_their_place() {
    let dir = std::env::temp_dir();
    let write = |name: &str, text: &str| {
        let p = dir.join(format!("sagtrip-detect-{}-{name}", std::process::id()));
        std::fs::write(&p, text).unwrap();
        p
    };
    let columns = sagtrip::recording::CsvColumns::default();
    let open = |p: &std::path::Path| {
        sagtrip::recording::open(p, 0, &columns)
            .map(std::iter::Iterator::collect::<Result<Vec<_>, _>>)
    };
    let empty = write("empty.csv", "");
    assert!(open(&empty).unwrap_err().to_string().contains("empty"));
    let nan = write("nan.csv", "time_s,voltage_V\n0,1\n0.0001,2\n0.0002,NaN\n");
    let err = open(&nan).unwrap().unwrap_err().to_string();
    assert!(
        err.contains(":4:") && err.contains("not a finite number"),
        "{err}"
    );
    let slow = write("slow.csv", "time_s,voltage_V\n0,1\n0.01,2\n");
    assert!(open(&slow).unwrap_err().to_string().contains("too few"));
    let uneven = write("uneven.csv", "time_s,voltage_V\n0,1\n0.0001,2\n0.0005,2\n");
    assert!(open(&uneven)
        .unwrap()
        .unwrap_err()
        .to_string()
        .contains("evenly spaced"));
    let truncated = write("truncated.wav", "RIFF\u{24}\0\0\0WAVEfmt ");
    assert!(open(&truncated).is_err());
    let unknown = write("data.bin", "1 2 3");
    assert!(open(&unknown)
        .unwrap_err()
        .to_string()
        .contains("unsupported"));
}

#[test]
fn the_example_recordings_hold_the_events_they_are_made_of() {
    // waveforms/README.md lists what each example holds; make.sh builds them from profiles.
    let expected: &[(&str, &[DisturbanceKind])] = &[
        ("motor-start-sag.wav", &[DisturbanceKind::Dip]),
        ("generator-swell.wav", &[DisturbanceKind::Swell]),
        (
            "recloser.wav",
            &[DisturbanceKind::Interruption, DisturbanceKind::Interruption],
        ),
        (
            "noisy-minute.wav",
            &[
                DisturbanceKind::Dip,
                DisturbanceKind::Swell,
                DisturbanceKind::Interruption,
            ],
        ),
    ];
    for (file, kinds) in expected {
        let path = std::path::Path::new(env!("CARGO_MANIFEST_DIR"))
            .join("waveforms")
            .join(file);
        let samples =
            sagtrip::recording::open(&path, 0, &sagtrip::recording::CsvColumns::default()).unwrap();
        let rate = samples.sample_rate;
        let mut d = sagtrip::detect::Detector::new(rate, 230.0, 50.0, Thresholds::default());
        for s in samples {
            d.push(s.unwrap() * 650.538);
        }
        let found: Vec<DisturbanceKind> = d.finish().events.iter().map(|e| e.kind).collect();
        assert_eq!(&found, kinds, "{file}");
    }
}

#[test]
fn classes_are_taken_on_the_level_as_reported_at_every_table_boundary() {
    // Events synthesised at exactly the boundary levels of EN 50160:2010 (dip rows
    // A: 90 > u >= 80, B: 80 > u >= 70, C: 70 > u >= 40, D: 40 > u >= 5, X: 5 > u; swell rows
    // S: u >= 120, T: 120 > u > 110) and IEEE 1159-2009 Table 2 (sag 0.1-0.9 pu, swell
    // 1.1-1.8 pu, interruption below 0.1 pu). 10 cycles: 210 ms by the IEC 61000-4-30
    // method, EN 50160 column 2 (200 < t <= 500 ms) and IEEE 1159 "instantaneous".
    // `None`: not an event at all (a dip starts below 90%, a swell above 110%).
    type Expected = Option<(DisturbanceKind, &'static str, &'static str)>;
    let cases: [(&str, Expected); 8] = [
        ("dip:90%:10cyc", None),
        // The window across the onset reads sqrt((1 + 0.8^2) / 2) = 90.55%, not yet a dip
        // (derived from the IEC 61000-4-30 window): 200 ms, column 1.
        (
            "dip:80%:10cyc",
            Some((DisturbanceKind::Dip, "A1", "instantaneous sag")),
        ),
        (
            "dip:70%:10cyc",
            Some((DisturbanceKind::Dip, "B2", "instantaneous sag")),
        ),
        (
            "dip:40%:10cyc",
            Some((DisturbanceKind::Dip, "C2", "instantaneous sag")),
        ),
        (
            "dip:10%:10cyc",
            Some((DisturbanceKind::Dip, "D2", "instantaneous sag")),
        ),
        (
            "dip:5%:10cyc",
            Some((
                DisturbanceKind::Interruption,
                "D2",
                "momentary interruption",
            )),
        ),
        ("swell:110%:10cyc", None),
        (
            "swell:120%:10cyc",
            Some((DisturbanceKind::Swell, "S1", "instantaneous swell")),
        ),
    ];
    for (spec, expected) in cases {
        let v = synthetic(spec, 0.5, false);
        let d = detect(&v, f64::from(RATE), 230.0, 50.0, Thresholds::default());
        match expected {
            None => assert!(d.events.is_empty(), "{spec}: {:?}", d.events),
            Some((kind, en, ieee)) => {
                assert_eq!(d.events.len(), 1, "{spec}: {:?}", d.events);
                let e = &d.events[0];
                assert_eq!(e.kind, kind, "{spec}");
                assert_eq!(e.en_50160, en, "{spec}: level {}", e.level_pct);
                assert_eq!(e.ieee_1159, ieee, "{spec}: level {}", e.level_pct);
            }
        }
    }
    // Rounding to the reported resolution decides: 39.996% reports as 40.00%, row C.
    assert_eq!(sagtrip::detect::reported_level(39.996), 40.0);
    assert_eq!(
        sagtrip::detect::en_50160(DisturbanceKind::Dip, 0.21, 40.0),
        "C2"
    );
    assert_eq!(
        sagtrip::detect::en_50160(DisturbanceKind::Dip, 0.21, 39.99),
        "D2"
    );
}

#[test]
fn the_frequency_leaves_out_cycles_an_event_distorts() {
    // A recording at exactly 50 Hz with a deep dip, an interruption and a swell: each
    // 10 s interval (IEC 61000-4-30) reads 50 Hz once the cycles near the events are left
    // out (they shifted the zero crossings by milliseconds).
    let v = synthetic(
        "dip:10%:3cyc@90;gap:2s;interrupt:7cyc;gap:2s;swell:150%:5cyc",
        0.5,
        false,
    );
    let d = detect(&v, f64::from(RATE), 230.0, 50.0, Thresholds::default());
    assert_eq!(d.events.len(), 3, "{:?}", d.events);
    let intervals = d.frequency_intervals();
    assert!(!intervals.is_empty());
    for f in intervals {
        assert!((f - 50.0).abs() < 1e-6, "{f}");
    }
}

#[test]
fn an_outage_at_the_start_is_an_interruption_and_no_mains_is_refused() {
    let amplitude = 230.0 * std::f64::consts::SQRT_2;
    let w = 2.0 * std::f64::consts::PI * 50.0;
    let rate = f64::from(RATE);
    // Half a second of outage, then the supply: the interruption starts at the first
    // Urms(1/2) window (stamped one cycle after the first sample) and lasts the outage's
    // 500 ms within one half cycle (IEC 61000-4-30:2015 5.4, duration uncertainty; from
    // memory).
    let v: Vec<f64> = (0..20_000)
        .map(|k| {
            let t = f64::from(k) / rate;
            if t < 0.5 {
                0.0
            } else {
                amplitude * (w * t).sin()
            }
        })
        .collect();
    let d = detect(&v, rate, 230.0, 50.0, Thresholds::default());
    assert_eq!(d.events.len(), 1, "{:?}", d.events);
    let e = &d.events[0];
    assert_eq!(e.kind, DisturbanceKind::Interruption);
    assert!(e.start_s <= 0.02 + 1e-9, "{}", e.start_s);
    assert!((e.duration_s - 0.5).abs() <= 0.01 + 1e-9, "{e:?}");
    assert_eq!(d.check_mains(), Ok(()));
    // All zero, or DC: no whole cycle anywhere, so no mains to judge.
    for level in [0.0, 325.0] {
        let flat = vec![level; 20_000];
        let d = detect(&flat, rate, 230.0, 50.0, Thresholds::default());
        assert!(d.check_mains().is_err(), "{level} V");
    }
}

#[test]
fn a_corrupt_sample_is_refused_with_its_place() {
    // One sample at 1e30 V (a corrupt value, far beyond any mains) in a clean recording.
    let path =
        std::env::temp_dir().join(format!("sagtrip-detect-{}-spike.csv", std::process::id()));
    let mut text = String::from("time_s,voltage_V\n");
    for k in 0..4000 {
        let t = f64::from(k) / 10_000.0;
        let v = if k == 3000 {
            1e30
        } else {
            325.0 * (2.0 * std::f64::consts::PI * 50.0 * t).sin()
        };
        text += &format!("{t},{v}\n");
    }
    std::fs::write(&path, text).unwrap();
    let scaled =
        sagtrip::recording::open_scaled(&path, 0, &sagtrip::recording::CsvColumns::default(), None)
            .unwrap();
    let err = scaled
        .volts()
        .collect::<Result<Vec<_>, _>>()
        .unwrap_err()
        .to_string();
    assert!(
        err.contains("sample 3000") && err.contains("1e30 V"),
        "{err}"
    );
}

#[test]
fn a_latin1_comment_in_a_csv_recording_is_read_past() {
    // An instrument's export with a degree sign in Latin-1 (byte 0xB0) in a comment line.
    let path =
        std::env::temp_dir().join(format!("sagtrip-detect-{}-latin1.csv", std::process::id()));
    let mut bytes = b"# probe at 25 \xb0C\ntime_s,voltage_V\n".to_vec();
    for k in 0..400 {
        let t = f64::from(k) / 10_000.0;
        bytes.extend(
            format!(
                "{t},{}\n",
                325.0 * (2.0 * std::f64::consts::PI * 50.0 * t).sin()
            )
            .bytes(),
        );
    }
    std::fs::write(&path, bytes).unwrap();
    let samples = sagtrip::recording::open(&path, 0, &sagtrip::recording::CsvColumns::default())
        .unwrap()
        .collect::<Result<Vec<_>, _>>()
        .unwrap();
    assert_eq!(samples.len(), 400);
}

#[test]
fn a_streamed_replay_trace_is_the_kept_one_byte_for_byte() {
    // The trace written chunk by chunk while a replay runs (bounded memory) must be the one
    // the replay would keep and write at the end.
    let guard = common::guard();
    let settled = common::settled_guard();
    // 2.7 s of recording: streamed in one-second chunks, then the rest.
    let volts = synthetic("interrupt:10cyc", 1.5, false);
    let probes = sagtrip::plot::plot_probes(guard);
    let kept = settled
        .replay(
            volts.iter().map(|&v| Ok::<f64, String>(v)),
            f64::from(RATE),
            Thresholds::default(),
            Some(probes.clone()),
        )
        .unwrap();
    let mut expected = Vec::new();
    kept.trace
        .as_ref()
        .unwrap()
        .write_csv(guard, &mut expected)
        .unwrap();
    let mut streamed = Vec::new();
    let replay = settled
        .replay_traced(
            volts.iter().map(|&v| Ok::<f64, String>(v)),
            f64::from(RATE),
            Thresholds::default(),
            Some(sagtrip::scenario::TraceOut {
                probes,
                stream: Some(&mut streamed),
            }),
            &mut |_| {},
        )
        .unwrap();
    assert!(expected.len() > 10_000);
    assert!(streamed == expected, "the streamed trace differs");
    assert_eq!(replay.trips, kept.trips);
}
