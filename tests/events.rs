//! Event profiles against IEC 61000-4-11, and one-event runs of the reference guard against
//! hand estimates.

mod common;

use common::circuit;
use sagtrip::profile::{iec_presets, parse_spec, resolve, Duration, Step, DEFAULT_EDGE_S};
use sagtrip::scenario::{run_event, EventOptions};
use sagtrip::waveform::Waveform;

#[test]
fn presets_are_the_preferred_test_levels_of_the_standard() {
    // IEC 61000-4-11:2020 Table 1 (dips), class 2: 0% 1/2 cycle, 0% 1 cycle, 70% 25/30
    // cycles; class 3 adds 40% 10/12 cycles and 80% 250/300 cycles. Table 2 (short
    // interruptions): 0% 250/300 cycles for both classes. Table 3 (voltage variation, from
    // memory): down to 70% abruptly, 1 cycle at 70%, back over 25/30 cycles.
    let expected: &[(&str, f64, f64, f64)] = &[
        ("class2-dip-0-half", 0.0, 0.5, 0.5),
        ("class2-dip-0-1cyc", 0.0, 1.0, 1.0),
        ("class2-dip-70", 0.7, 25.0, 30.0),
        ("class2-interrupt", 0.0, 250.0, 300.0),
        ("class3-dip-0-half", 0.0, 0.5, 0.5),
        ("class3-dip-0-1cyc", 0.0, 1.0, 1.0),
        ("class3-dip-40", 0.4, 10.0, 12.0),
        ("class3-dip-70", 0.7, 25.0, 30.0),
        ("class3-dip-80", 0.8, 250.0, 300.0),
        ("class3-interrupt", 0.0, 250.0, 300.0),
    ];
    let presets = iec_presets();
    for &(name, residual, c50, c60) in expected {
        let p = presets
            .iter()
            .find(|p| p.name == name)
            .unwrap_or_else(|| panic!("{name}"));
        assert_eq!(
            p.profile_50hz.steps,
            [Step::Dip {
                residual,
                duration: Duration::Cycles(c50)
            }],
            "{name}"
        );
        assert_eq!(
            p.profile_60hz.steps,
            [Step::Dip {
                residual,
                duration: Duration::Cycles(c60)
            }],
            "{name}"
        );
        // 50/60 Hz pairs last the same time (derived from the cycle counts).
        assert!(
            (Duration::Cycles(c50).seconds(50.0) - Duration::Cycles(c60).seconds(60.0)).abs()
                < 1e-12
                || c50 == c60
        );
    }
    for class in [2, 3] {
        let vary = presets
            .iter()
            .find(|p| p.name == format!("class{class}-vary-70"))
            .unwrap();
        assert_eq!(
            vary.profile_50hz.steps,
            [Step::Variation {
                residual: 0.7,
                decrease: Duration::Cycles(0.0),
                hold: Duration::Cycles(1.0),
                increase: Duration::Cycles(25.0)
            }]
        );
    }
    // Class 2 has no 40% or 80% dips.
    assert!(presets
        .iter()
        .all(|p| p.name != "class2-dip-40" && p.name != "class2-dip-80"));
    // Presets follow the supply frequency.
    let p = resolve("class3-dip-40@45", 60.0, DEFAULT_EDGE_S).unwrap();
    assert_eq!(
        p.steps,
        [Step::Dip {
            residual: 0.4,
            duration: Duration::Cycles(12.0)
        }]
    );
    assert_eq!(p.phase_deg, 45.0);
}

fn disturbed(spec: &str, onset: f64) -> (Waveform, f64) {
    let profile = parse_spec(spec, DEFAULT_EDGE_S).unwrap();
    let envelope = profile.envelope(50.0);
    let onset = onset + profile.phase_deg / 360.0 / 50.0;
    (
        Waveform::Disturbed {
            amplitude: 230.0 * std::f64::consts::SQRT_2,
            frequency_hz: 50.0,
            phase_deg: 0.0,
            onset_s: onset,
            envelope,
        },
        onset,
    )
}

/// RMS over one cycle starting at `start`, by fine sampling.
fn cycle_rms(w: &Waveform, start: f64) -> f64 {
    let n = 20_000;
    let sum: f64 = (0..n)
        .map(|k| {
            let v = w.value(start + (f64::from(k) + 0.5) / f64::from(n) * 0.02);
            v * v
        })
        .sum();
    (sum / f64::from(n)).sqrt()
}

#[test]
fn a_generated_dip_has_the_residual_rms_and_starts_at_the_angle() {
    for (spec, residual, angle) in [
        ("dip:40%:10cyc@90", 0.4, 90.0),
        ("dip:70%:25cyc@45", 0.7, 45.0),
    ] {
        let (w, onset) = disturbed(spec, 1.0);
        // One-cycle RMS inside the dip is the residual level (IEC 61000-4-11: levels are
        // residual voltage in % of U_T).
        let rms = cycle_rms(&w, onset + 0.04);
        assert!(
            (rms - residual * 230.0).abs() < 1e-3 * 230.0,
            "{spec}: {rms}"
        );
        // Before the dip, nominal.
        assert!((cycle_rms(&w, 0.5) - 230.0).abs() < 0.01);
        // The change starts at the requested phase angle of the mains sine.
        let phase = (onset * 50.0).fract() * 360.0;
        assert!((phase - angle).abs() < 1e-6, "{phase}");
        // Edge: the level goes from nominal to the residual over the edge time.
        let amplitude = 230.0 * std::f64::consts::SQRT_2;
        let sin = (2.0 * std::f64::consts::PI * 50.0 * onset).sin();
        let level =
            |t: f64| w.value(t) / (amplitude * (2.0 * std::f64::consts::PI * 50.0 * t).sin());
        if sin.abs() > 0.5 {
            assert!((level(onset) - 1.0).abs() < 1e-3);
            assert!((level(onset + DEFAULT_EDGE_S) - residual).abs() < 1e-3);
            assert!((level(onset + 0.5 * DEFAULT_EDGE_S) - 0.5 * (1.0 + residual)).abs() < 1e-2);
        }
        // Breakpoints at the corners of the envelope.
        assert!((w.next_breakpoint(onset - 1e-3) - onset).abs() < 1e-12);
    }
}

#[test]
fn an_interruption_trips_the_guard_as_the_sense_capacitor_discharge_predicts() {
    let guard = circuit(sagtrip::builtin::REFERENCE_GUARD);
    let profile = parse_spec("interrupt:10cyc", DEFAULT_EDGE_S).unwrap();
    let options = EventOptions {
        probes: vec![
            sagtrip::probe::Probe::parse("sense", &guard).unwrap(),
            sagtrip::probe::Probe::parse("ref_lo", &guard).unwrap(),
        ],
        ..EventOptions::default()
    };
    let run = run_event(&guard, &profile, &options).unwrap();
    let m = &run.measurements;
    assert!(m.tripped);
    // Hand estimate (the guard's design estimate, common practice): during the interruption d_sense blocks and c_sense
    // discharges through r_top + r_bot, tau = 83 kohm x 4.7 uF = 0.39 s, so `sense` falls
    // from its value at onset to ref_lo after t = tau ln(V_sense / V_ref_lo) (RC discharge,
    // Hayt, Kemmerly and Durbin). The comparator then turns q_drive off; the coil current
    // (30 mA at 12 V / 400 ohm) decays with L/R = 0.625 ms through the flyback diode to the
    // 4 mA drop-out: about (L/R) ln(30/4) = 1.26 ms (the diode's drop makes it a little
    // faster); then the 3 ms open travel.
    let t = &run.trace.time;
    let k = t.partition_point(|&x| x < run.onset_s);
    let sense = sagtrip::probe::Probe::parse("sense", &guard).unwrap();
    let ref_lo = sagtrip::probe::Probe::parse("ref_lo", &guard).unwrap();
    let v_sense = run.trace.column(&sense).unwrap()[k];
    let v_ref = run.trace.column(&ref_lo).unwrap()[k];
    let tau = 83e3 * 4.7e-6;
    let estimate = tau * (v_sense / v_ref).ln() + 0.625e-3 * (30.0f64 / 4.0).ln() + 3e-3;
    let latency = m.trip_latency_ms.unwrap() * 1e-3;
    assert!(
        (latency / estimate - 1.0).abs() < 0.10,
        "trip latency {latency} s, hand estimate {estimate} s"
    );
    // It reconnects after the delay (about 0.6 s after the supply is back, the guard's design estimate).
    let restore = m.restore_latency_ms.unwrap() * 1e-3;
    assert!(restore > 0.4 && restore < 1.0, "{restore}");
    assert!(!m.chatter);
    assert_eq!(m.relay_transitions, 2);
    assert!(run.settled_after);
    // The open travel and the bounce are the relay's: 3 ms, 6 ms, 1.5 ms.
    assert!((m.release_time_ms.unwrap() - 3.0).abs() < 1e-6);
    assert!((m.operate_time_ms.unwrap() - 6.0).abs() < 1e-6);
    assert!((m.bounce_ms.unwrap() - 1.5).abs() < 1e-6);
}

#[test]
fn a_half_cycle_interruption_is_ridden_through() {
    // "dips of a cycle or less ride through" (the guard's design estimate, common practice).
    let guard = circuit(sagtrip::builtin::REFERENCE_GUARD);
    let profile = resolve("class3-dip-0-half", 50.0, DEFAULT_EDGE_S).unwrap();
    let run = run_event(&guard, &profile, &EventOptions::default()).unwrap();
    assert!(!run.measurements.tripped);
    assert_eq!(run.measurements.load_interruption_ms, 0.0);
    assert_eq!(run.measurements.trip_latency_ms, None);
}

#[test]
fn a_slow_ramp_makes_the_guard_chatter_and_the_hysteresis_variant_not() {
    // Down through the under-voltage threshold (near 200 V) and held at 84%: without
    // hysteresis the comparator toggles on the ripple of `sense` as the level creeps through
    // its threshold; over 20 s the relay follows it and the load path opens, closes and
    // opens again (chatter, the design's known weakness, common practice). Over 3 s the
    // comparator toggles as much per volt but the load path opens only once. With
    // hysteresis (feedback resistors) the comparator switches once and nothing chatters.
    let options = EventOptions {
        restore_limit_s: Some(0.5),
        ..EventOptions::default()
    };
    let plain = circuit(sagtrip::builtin::REFERENCE_GUARD);
    let toggles = |run: &sagtrip::scenario::EventRun| {
        run.comparator_toggles
            .iter()
            .map(|(_, n)| *n)
            .max()
            .unwrap()
    };
    let slow = parse_spec("ramp:100%-84%:20s", DEFAULT_EDGE_S).unwrap();
    let run = run_event(&plain, &slow, &options).unwrap();
    assert!(run.measurements.chatter, "{:?}", run.measurements);
    assert!(run.measurements.load_path_openings >= 2);
    let fast = parse_spec("ramp:100%-84%:3s", DEFAULT_EDGE_S).unwrap();
    let run = run_event(&plain, &fast, &options).unwrap();
    assert!(run.measurements.tripped);
    assert_eq!(run.measurements.load_path_openings, 1);
    // Comparator toggles are reported apart and are not chatter.
    assert!(!run.measurements.chatter);
    assert!(toggles(&run) > 2, "{:?}", run.comparator_toggles);
    let text = std::fs::read_to_string(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/examples/guard-230v-hysteresis.toml"
    ))
    .unwrap();
    let fixed = circuit(&text);
    for profile in [&slow, &fast] {
        let run = run_event(&fixed, profile, &options).unwrap();
        assert!(run.measurements.tripped);
        assert!(!run.measurements.chatter, "{:?}", run.measurements);
        assert_eq!(run.measurements.relay_transitions, 1);
        assert!(toggles(&run) <= 1, "{:?}", run.comparator_toggles);
    }
}

#[test]
fn an_interruption_opens_and_closes_the_load_path_once_and_is_not_chatter() {
    // A 545.56 ms interruption: one trip and one reconnection. The under-voltage
    // comparator's output toggles several times as its supply collapses and returns; that
    // is listed apart and is not chatter (docs/measurements.md).
    let guard = circuit(sagtrip::builtin::REFERENCE_GUARD);
    let profile = parse_spec("interrupt:545.56ms", DEFAULT_EDGE_S).unwrap();
    let run = run_event(&guard, &profile, &EventOptions::default()).unwrap();
    let m = &run.measurements;
    assert!(m.tripped);
    assert_eq!(m.relay_transitions, 2);
    assert_eq!((m.load_path_openings, m.load_path_closings), (1, 1));
    assert!(!m.chatter);
    let names: Vec<&str> = run
        .comparator_toggles
        .iter()
        .map(|(n, _)| n.as_str())
        .collect();
    assert_eq!(names, ["cmp_ov", "cmp_uv"]);
    assert!(
        run.comparator_toggles[1].1 > 2,
        "{:?}",
        run.comparator_toggles
    );
}

#[test]
fn synthesised_wav_files_hold_the_profile_at_the_stated_scale() {
    use sagtrip::synth::{samples, wav_bytes, SampleFormat, SynthOptions};
    let profile = parse_spec("dip:40%:10cyc", DEFAULT_EDGE_S).unwrap();
    for (format, resolution) in [
        (SampleFormat::Int16, 1.0 / 32767.0),
        (SampleFormat::Int24, 1.0 / 8_388_607.0),
        (SampleFormat::Float32, 1e-7),
    ] {
        let options = SynthOptions {
            rms_v: 230.0,
            frequency_hz: 50.0,
            sample_rate: 20_000,
            lead_s: 0.2,
            tail_s: 0.2,
            volts_per_full_scale: 650.0,
            format,
            harmonics: Vec::new(),
            noise: 0.0,
        };
        let volts = samples(&profile, &options);
        let bytes = wav_bytes(&volts, &options).unwrap();
        let mut reader = hound::WavReader::new(std::io::Cursor::new(bytes)).unwrap();
        let spec = reader.spec();
        assert_eq!(spec.sample_rate, 20_000);
        assert_eq!(spec.channels, 1);
        let read: Vec<f64> = match format {
            SampleFormat::Int16 => reader
                .samples::<i16>()
                .map(|s| f64::from(s.unwrap()) / 32767.0 * 650.0)
                .collect(),
            SampleFormat::Int24 => reader
                .samples::<i32>()
                .map(|s| f64::from(s.unwrap()) / 8_388_607.0 * 650.0)
                .collect(),
            SampleFormat::Float32 => reader
                .samples::<f32>()
                .map(|s| f64::from(s.unwrap()) * 650.0)
                .collect(),
        };
        assert_eq!(read.len(), volts.len());
        for (a, b) in read.iter().zip(&volts) {
            assert!((a - b).abs() <= 650.0 * resolution, "{a} vs {b}");
        }
        // One-cycle RMS inside the dip (0.26 .. 0.28 s): 40% of 230 V.
        let cycle: Vec<f64> = read[5200..5600].to_vec();
        let rms = (cycle.iter().map(|v| v * v).sum::<f64>() / cycle.len() as f64).sqrt();
        assert!((rms - 92.0).abs() < 0.1, "{rms}");
    }
    // Beyond full scale is refused, not clipped.
    let options = SynthOptions {
        rms_v: 230.0,
        frequency_hz: 50.0,
        sample_rate: 10_000,
        lead_s: 0.1,
        tail_s: 0.1,
        volts_per_full_scale: 300.0,
        format: SampleFormat::Int16,
        harmonics: Vec::new(),
        noise: 0.0,
    };
    assert!(wav_bytes(&samples(&profile, &options), &options).is_err());
}

#[test]
fn event_files_describe_sequences_and_errors_name_the_field() {
    let text = std::fs::read_to_string(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/examples/events/recloser.toml"
    ))
    .unwrap();
    let p = sagtrip::profile::parse_event_file(&text, "recloser.toml").unwrap();
    assert_eq!(
        p.spec(),
        "interrupt:300ms;gap:500ms;interrupt:300ms;vary:92%:0cyc/2s/50cyc"
    );
    // Two interruptions 0.8 s apart (300 ms + 500 ms gap) then the low tail.
    let e = p.envelope(50.0);
    assert_eq!(e.windows.len(), 3);
    assert_eq!(e.level(0.1), 0.0);
    assert_eq!(e.level(0.5), 1.0);
    assert_eq!(e.level(0.9), 0.0);
    assert!((e.level(1.5) - 0.92).abs() < 1e-12);

    let bad = "[[event]]\nkind = \"dip\"\nresidual = \"40%\"\nduration = \"10cycles\"\n";
    let err = sagtrip::profile::parse_event_file(bad, "bad.toml").unwrap_err();
    assert_eq!((err.line, err.column), (4, 12));
    assert_eq!(err.field, "event.1.duration");
    let bad = "[[event]]\nkind = \"sag\"\nduration = \"1cyc\"\n";
    let err = sagtrip::profile::parse_event_file(bad, "bad.toml").unwrap_err();
    assert!(
        err.to_string()
            .starts_with("bad.toml:2:8: event.1.kind: unknown event kind `sag`"),
        "{err}"
    );
    let bad = "[[event]]\nkind = \"gap\"\nduration = \"1cyc\"\nlevel = \"5%\"\n";
    let err = sagtrip::profile::parse_event_file(bad, "bad.toml").unwrap_err();
    assert_eq!(err.field, "event.1.level");
}

#[test]
fn replaying_a_synthesised_recording_matches_the_event_run() {
    use sagtrip::synth::{samples, SampleFormat, SynthOptions};
    let guard = circuit(sagtrip::builtin::REFERENCE_GUARD);
    let profile = parse_spec("dip:40%:10cyc", DEFAULT_EDGE_S).unwrap();
    let run = run_event(&guard, &profile, &EventOptions::default()).unwrap();
    let options = SynthOptions {
        rms_v: 230.0,
        frequency_hz: 50.0,
        sample_rate: 20_000,
        lead_s: 0.2,
        tail_s: 1.2,
        volts_per_full_scale: 650.0,
        format: SampleFormat::Float32,
        harmonics: Vec::new(),
        noise: 0.0,
    };
    let volts = samples(&profile, &options);
    let settled = common::settled_guard();
    let replay = settled
        .replay(
            volts.into_iter().map(Ok::<f64, String>),
            20_000.0,
            sagtrip::detect::Thresholds::default(),
            None,
        )
        .unwrap();
    assert_eq!(replay.responses.len(), 1);
    assert!(replay.nuisance_trips.is_empty());
    let response = &replay.responses[0];
    assert!(response.tripped);
    let trip = response.trip.as_ref().unwrap();
    // The onset is at 0.2 s into the recording (10 whole cycles of lead). The two runs
    // differ only in how the source is followed (recorded samples, linearly interpolated,
    // against the profile itself): the issue asks for agreement within one simulation step,
    // here the replay's step limit of two sample intervals, 100 us.
    let m = &run.measurements;
    let replay_trip_ms = (trip.time_s - 0.2) * 1e3;
    assert!(
        (replay_trip_ms - m.trip_latency_ms.unwrap()).abs() < 0.1,
        "replay {replay_trip_ms} ms vs run {} ms",
        m.trip_latency_ms.unwrap()
    );
    let replay_restore_ms = (trip.reconnected_s.unwrap() - 0.2 - run.envelope.end_s) * 1e3;
    assert!(
        (replay_restore_ms - m.restore_latency_ms.unwrap()).abs() < 0.1,
        "replay {replay_restore_ms} ms vs run {} ms",
        m.restore_latency_ms.unwrap()
    );
}

#[test]
fn replay_counts_from_the_point_on_wave_onset_as_run_does() {
    // A recording of an event, replayed, must give the latencies `run` gives for the same
    // event: both count from the true onset and end (the Urms(1/2) start of IEC
    // 61000-4-30:2015 5.4.2, from memory, lies up to one cycle after the onset). 16-bit
    // samples at 10 kHz, as `synth` writes by default; agreement within 0.2 ms.
    use sagtrip::synth::{samples, SampleFormat, SynthOptions};
    let guard = circuit(sagtrip::builtin::REFERENCE_GUARD);
    let settled = common::settled_guard();
    let options = SynthOptions {
        rms_v: 230.0,
        frequency_hz: 50.0,
        sample_rate: 10_000,
        lead_s: 0.2,
        tail_s: 1.2,
        volts_per_full_scale: 650.0,
        format: SampleFormat::Int16,
        harmonics: Vec::new(),
        noise: 0.0,
    };
    for spec in [
        "dip:40%:10cyc@0",
        "dip:40%:10cyc@90",
        "dip:70%:25cyc@200",
        "interrupt:5cyc@45",
        "interrupt:10cyc@270",
        "swell:120%:10cyc@0",
        "swell:125%:20cyc@135",
    ] {
        let profile = parse_spec(spec, DEFAULT_EDGE_S).unwrap();
        let run = settled.run(&guard, &profile).unwrap();
        let volts = samples(&profile, &options);
        let replay = settled
            .replay(
                volts.into_iter().map(Ok::<f64, String>),
                10_000.0,
                sagtrip::detect::Thresholds::default(),
                None,
            )
            .unwrap();
        assert_eq!(replay.responses.len(), 1, "{spec}");
        let r = &replay.responses[0];
        assert_eq!(
            r.latencies_from,
            sagtrip::scenario::LatencyReference::PointOnWave,
            "{spec}"
        );
        // The onset in the file: the lead plus the phase angle.
        let onset = 0.2 + profile.phase_deg / 360.0 / 50.0;
        let found = r.event.wave_start_s.unwrap();
        assert!((found - onset).abs() < 1e-4, "{spec}: onset {found} s");
        let m = &run.measurements;
        let (rt, mt) = (r.trip_latency_ms.unwrap(), m.trip_latency_ms.unwrap());
        assert!((rt - mt).abs() < 0.2, "{spec}: trip {rt} ms vs run {mt} ms");
        let (rr, mr) = (r.restore_latency_ms.unwrap(), m.restore_latency_ms.unwrap());
        assert!(
            (rr - mr).abs() < 0.2,
            "{spec}: restore {rr} ms vs run {mr} ms"
        );
    }
}

#[test]
fn a_reconnection_between_events_of_a_sequence_is_reported_never_negative() {
    // The recloser sequence: two 300 ms interruptions 500 ms apart, then 2 s at 92 % and a
    // 50-cycle rise. The guard trips on the first interruption and its 0.7 s delay (RC
    // charge, as in the long-delay test below) is not over when the second one comes; it
    // reconnects about 0.7 s after the second ends, while 92 % (above its under-voltage
    // threshold of about 87 %) still holds: before the sequence's end. Before, this printed
    // a restore latency of -2281.6 ms.
    let text = std::fs::read_to_string(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/examples/events/recloser.toml"
    ))
    .unwrap();
    let profile = sagtrip::profile::parse_event_file(&text, "recloser.toml").unwrap();
    let guard = circuit(sagtrip::builtin::REFERENCE_GUARD);
    let run = run_event(&guard, &profile, &EventOptions::default()).unwrap();
    let m = &run.measurements;
    assert!(m.tripped);
    assert!(m.load_connected_at_end);
    assert_eq!(m.restore_latency_ms, None, "{m:?}");
    let last = m.reconnections.last().unwrap();
    assert_eq!(last.after_disturbance, Some(2));
    assert!(last.during_disturbance);
    let latency = last.latency_ms.unwrap();
    assert!((600.0..800.0).contains(&latency), "{latency}");
    for r in &m.reconnections {
        assert!(r.latency_ms.is_none_or(|l| l >= 0.0), "{r:?}");
    }
}

/// The reference guard with one value of its file replaced.
fn guard_with(old: &str, new: &str) -> sagtrip::circuit::Circuit {
    let text = sagtrip::builtin::REFERENCE_GUARD;
    assert_eq!(text.matches(old).count(), 1, "{old}");
    circuit(&text.replace(old, new))
}

#[test]
fn a_long_reconnection_delay_is_waited_for_before_the_event() {
    // c_delay 100 uF instead of 10 uF: the load connects only about 7 s after power-up.
    let slow = guard_with(
        "pins = [\"delay\", \"gnd\"]\ncapacitance = \"10u\"",
        "pins = [\"delay\", \"gnd\"]\ncapacitance = \"100u\"",
    );
    let profile = parse_spec("dip:40%:10cyc", DEFAULT_EDGE_S).unwrap();
    let run = run_event(&slow, &profile, &EventOptions::default()).unwrap();
    let m = &run.measurements;
    // Powered up means the load is connected: the event must trip it, as it trips the
    // plain guard (the delay capacitor plays no part in the trip).
    assert!(m.tripped, "{m:?}");
    assert!(run.settled_at_s > 6.0, "{}", run.settled_at_s);
    let plain = run_event(
        &circuit(sagtrip::builtin::REFERENCE_GUARD),
        &profile,
        &EventOptions::default(),
    )
    .unwrap();
    let (slow_trip, plain_trip) = (
        m.trip_latency_ms.unwrap(),
        plain.measurements.trip_latency_ms.unwrap(),
    );
    assert!(
        (slow_trip - plain_trip).abs() < 0.1,
        "{slow_trip} {plain_trip}"
    );
    // Restore: c_delay charges from 0 V through r_delay (220 kohm) from the 12 V rail until
    // q_drive carries the 22 mA pick-up current: square law (Shichman-Hodges, IEEE JSSC
    // 1968) (K/2)(Vgs - 3 V)^2 = 22 mA with K = 0.5 A/V^2; the RC charge (Hayt, Kemmerly and
    // Durbin) reaches it after RC ln(12 / (12 - Vgs)); then the 6 ms close travel and the
    // 1.5 ms bounce. The coil's L/R (0.6 ms) and the comparators' recovery are neglected.
    let v_on = 3.0 + (2.0 * 22e-3 / 0.5f64).sqrt();
    let estimate_s = 220e3 * 100e-6 * (12.0 / (12.0 - v_on)).ln() + 6e-3 + 1.5e-3;
    let restore_s = m.restore_latency_ms.unwrap() * 1e-3;
    assert!(
        (restore_s / estimate_s - 1.0).abs() < 0.01,
        "restore {restore_s} s, hand estimate {estimate_s} s"
    );
    assert!(run.settled_after && m.load_connected_at_end);
}

#[test]
fn a_guard_that_never_connects_the_load_is_an_error_not_a_verdict() {
    // A pick-up current above what the coil can carry (12 V / 400 ohm = 30 mA).
    let never = guard_with("pickup_current = \"22mA\"", "pickup_current = \"40mA\"");
    let profile = parse_spec("dip:40%:10cyc", DEFAULT_EDGE_S).unwrap();
    let options = EventOptions {
        settle_limit_s: Some(2.0),
        ..EventOptions::default()
    };
    let error = run_event(&never, &profile, &options)
        .unwrap_err()
        .to_string();
    // The library names the relay and the limit; the command line adds its option.
    for part in ["relay `relay`", "power-up limit of 2 s"] {
        assert!(error.contains(part), "{error}");
    }
}

#[test]
fn a_run_cut_by_the_restore_limit_reports_no_restore_latency() {
    // The reference guard reconnects about 0.7 s after the supply is back; a 0.3 s restore
    // limit ends the run before that.
    let guard = circuit(sagtrip::builtin::REFERENCE_GUARD);
    let profile = parse_spec("interrupt:10cyc", DEFAULT_EDGE_S).unwrap();
    let options = EventOptions {
        restore_limit_s: Some(0.3),
        ..EventOptions::default()
    };
    let run = run_event(&guard, &profile, &options).unwrap();
    assert!(run.measurements.tripped);
    assert!(!run.settled_after && !run.measurements.load_connected_at_end);
    assert_eq!(run.measurements.restore_latency_ms, None);
    assert_eq!(run.restore_limit_s, 0.3);
}

#[test]
fn skipped_steady_cycles_are_filled_in_traces_and_plots() {
    // A 1 s swell to 120 %: most of it is skipped as periodic steady state. The trace must
    // have no hole there, and the supply it shows must be the source's own sine (analytic:
    // 1.2 x 230 V x sqrt 2, 50 Hz, phase 0 from t = 0) within 0.5 V.
    let guard = circuit(sagtrip::builtin::REFERENCE_GUARD);
    let profile = parse_spec("swell:120%:1s", DEFAULT_EDGE_S).unwrap();
    let run = run_event(&guard, &profile, &EventOptions::default()).unwrap();
    assert!(run.stats.skipped_s > 0.5, "{}", run.stats.skipped_s);
    assert!(!run.trace.skips.is_empty());
    let full = run.trace.expanded();
    let gap = full
        .time
        .windows(2)
        .map(|w| w[1] - w[0])
        .fold(0.0, f64::max);
    assert!(gap <= 0.5e-3 + 1e-9, "largest gap {gap} s");
    let mains = full.columns[0].as_slice();
    let amplitude = 1.2 * 230.0 * std::f64::consts::SQRT_2;
    let mut checked = 0;
    for (t, v) in full.time.iter().zip(mains) {
        if *t > run.onset_s + 0.1 && *t < run.event_end_s - 0.1 {
            let expected = amplitude * (2.0 * std::f64::consts::PI * 50.0 * t).sin();
            assert!(
                (v - expected).abs() < 0.5,
                "at {t} s: {v} V, expected {expected} V"
            );
            checked += 1;
        }
    }
    assert!(checked > 1000, "{checked}");
    // The CSV writes the same rows.
    let mut csv = Vec::new();
    run.trace.write_csv(&guard, &mut csv).unwrap();
    let lines = String::from_utf8(csv).unwrap().lines().count();
    assert_eq!(lines, full.time.len() + 1);
}

#[test]
fn durations_print_to_four_decimals() {
    // A bisected duration reads as people write it, not as every digit of its binary value.
    assert_eq!(
        Duration::Seconds(0.545_559_478_116_851_9).to_string(),
        "545.5595ms"
    );
    assert_eq!(Duration::Seconds(2.5).to_string(), "2.5s");
    assert_eq!(Duration::Cycles(10.0).to_string(), "10cyc");
    let profile = parse_spec("interrupt:545.5594781168519ms", DEFAULT_EDGE_S).unwrap();
    assert_eq!(profile.spec(), "interrupt:545.5595ms");
}

#[test]
fn skipping_steady_cycles_gives_the_full_step_results() {
    // The one shortcut inside long events (repeated cycles jumped while the level holds)
    // must agree with plain stepping: the same verdicts, latencies within 0.1 ms (the
    // accuracy sagtrip states for its timings). Class 3's 80% and 0% for 250 cycles
    // (IEC 61000-4-11:2004 Tables 1 and 2, from memory) and a long 115% swell.
    let guard = common::guard();
    let full = sagtrip::scenario::settle(
        guard,
        &EventOptions {
            skip_steady: false,
            ..EventOptions::default()
        },
    )
    .unwrap();
    let skipping = common::settled_guard();
    for spec in ["dip:80%:250cyc@90", "interrupt:250cyc", "swell:115%:250cyc"] {
        let profile = parse_spec(spec, DEFAULT_EDGE_S).unwrap();
        let a = skipping.run(guard, &profile).unwrap();
        let b = full.run(guard, &profile).unwrap();
        assert_eq!(b.stats.skipped_s, 0.0, "{spec}: plain stepping skipped");
        let (ma, mb) = (&a.measurements, &b.measurements);
        assert_eq!(ma.tripped, mb.tripped, "{spec}");
        assert_eq!(ma.chatter, mb.chatter, "{spec}");
        for (x, y, what) in [
            (ma.trip_latency_ms, mb.trip_latency_ms, "trip"),
            (ma.restore_latency_ms, mb.restore_latency_ms, "restore"),
        ] {
            match (x, y) {
                (Some(x), Some(y)) => assert!((x - y).abs() <= 0.1, "{spec} {what}: {x} vs {y}"),
                (x, y) => assert_eq!(x, y, "{spec} {what}"),
            }
        }
    }
    // The shortcut does act on a long steady level once the guard has tripped (else this
    // test compares nothing): about 4.8 s of the 5 s dip are skipped.
    let long = parse_spec("dip:80%:250cyc", DEFAULT_EDGE_S).unwrap();
    assert!(skipping.run(guard, &long).unwrap().stats.skipped_s > 1.0);
}
