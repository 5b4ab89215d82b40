//! Property tests: the readers of every input never panic, whatever they are given. Each
//! answers with a value or an error; none may crash, hang or exhaust memory. The case count
//! is bounded so that the suite stays quick.

use proptest::prelude::*;
use sagtrip::circuit_file::parse_circuit;
use sagtrip::profile::{parse_event_file, parse_spec, resolve, DEFAULT_EDGE_S};
use sagtrip::units::{parse_phase_deg, parse_value, Quantity};

fn config() -> ProptestConfig {
    ProptestConfig {
        cases: 2000,
        failure_persistence: None,
        ..ProptestConfig::default()
    }
}

/// Text that looks like the inputs: their own words and symbols mixed with anything.
fn spec_like() -> impl Strategy<Value = String> {
    let atoms = prop::sample::select(vec![
        "dip",
        "swell",
        "interrupt",
        "vary",
        "ramp",
        "gap",
        ":",
        ";",
        "@",
        "%",
        "/",
        "-",
        "cyc",
        "s",
        "ms",
        "us",
        "deg",
        "0",
        "1",
        "40",
        "1e300",
        "-5",
        "nan",
        "inf",
        ".",
        "e",
        " ",
        "class3-dip-40",
    ]);
    prop_oneof![
        prop::collection::vec(atoms, 0..12).prop_map(|v| v.concat()),
        ".{0,40}",
    ]
}

/// A reference guard with one stretch of its text replaced by arbitrary text.
fn mutated_guard() -> impl Strategy<Value = String> {
    let guard = sagtrip::builtin::REFERENCE_GUARD;
    (0..guard.len(), 0usize..40, ".{0,20}").prop_map(move |(at, len, with)| {
        let mut start = at;
        while !guard.is_char_boundary(start) {
            start -= 1;
        }
        let mut end = (start + len).min(guard.len());
        while !guard.is_char_boundary(end) {
            end -= 1;
        }
        format!("{}{with}{}", &guard[..start], &guard[end..])
    })
}

proptest! {
    #![proptest_config(config())]

    #[test]
    fn the_event_grammar_never_panics(spec in spec_like()) {
        if let Ok(profile) = parse_spec(&spec, DEFAULT_EDGE_S) {
            // What parses and passes its check also compiles to an envelope.
            if profile.check(50.0).is_ok() {
                let _ = profile.envelope(50.0);
            }
        }
        let _ = resolve(&spec, 60.0, DEFAULT_EDGE_S);
    }

    #[test]
    fn the_value_readers_never_panic(text in spec_like()) {
        for q in [
            Quantity::Voltage,
            Quantity::Current,
            Quantity::Resistance,
            Quantity::Capacitance,
            Quantity::Inductance,
            Quantity::Frequency,
            Quantity::Time,
            Quantity::Ratio,
        ] {
            let _ = parse_value(&text, q);
        }
        let _ = parse_phase_deg(&text);
    }

    #[test]
    fn the_circuit_reader_never_panics(text in mutated_guard()) {
        let _ = parse_circuit(&text, "mutated.toml");
    }

    #[test]
    fn the_circuit_reader_never_panics_on_any_text(text in ".{0,200}") {
        let _ = parse_circuit(&text, "any.toml");
    }

    #[test]
    fn the_event_file_reader_never_panics(
        phase in spec_like(),
        kind in spec_like(),
        duration in spec_like(),
        level in spec_like(),
    ) {
        let text = format!(
            "phase = \"{phase}\"\n[[event]]\nkind = \"{kind}\"\nduration = \"{duration}\"\n\
             residual = \"{level}\"\n"
        );
        let _ = parse_event_file(&text, "events.toml");
        let _ = parse_event_file(&phase, "events.toml");
    }

    #[test]
    fn the_plan_reader_never_panics(event in spec_like(), any in ".{0,80}") {
        let text = format!("title = \"p\"\n[[test]]\nname = \"t\"\nevent = \"{event}\"\n");
        let _ = sagtrip::table::parse_plan(&text, "plan.toml", 50.0);
        let _ = sagtrip::table::parse_plan(&any, "plan.toml", 50.0);
    }

    #[test]
    fn the_recording_readers_never_panic(
        bytes in prop::collection::vec(any::<u8>(), 0..600),
        header in prop::bool::ANY,
    ) {
        let dir = std::env::temp_dir();
        let id = std::process::id();
        // A CSV with a valid header and arbitrary bytes after it, or arbitrary bytes only.
        let csv = dir.join(format!("sagtrip-prop-{id}-{:?}.csv", std::thread::current().id()));
        let mut content = if header { b"time_s,voltage_V\n".to_vec() } else { Vec::new() };
        content.extend(&bytes);
        std::fs::write(&csv, &content).unwrap();
        if let Ok(samples) =
            sagtrip::recording::open(&csv, 0, &sagtrip::recording::CsvColumns::default())
        {
            let _ = samples.take(10_000).collect::<Vec<_>>();
        }
        // A WAV header followed by arbitrary bytes.
        let wav = dir.join(format!("sagtrip-prop-{id}-{:?}.wav", std::thread::current().id()));
        let mut content = b"RIFF\xff\xff\xff\xffWAVEfmt ".to_vec();
        content.extend(&bytes);
        std::fs::write(&wav, &content).unwrap();
        if let Ok(samples) =
            sagtrip::recording::open(&wav, 0, &sagtrip::recording::CsvColumns::default())
        {
            let _ = samples.take(10_000).collect::<Vec<_>>();
        }
        let _ = std::fs::remove_file(&csv);
        let _ = std::fs::remove_file(&wav);
    }
}
