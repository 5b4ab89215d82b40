//! Envelope following (steps of many mains cycles over a slow drift) against a closed form
//! and against plain stepping.

mod common;

use common::circuit;
use sagtrip::engine::{EnvelopeFollower, EnvelopeSettings, Settings, Simulator, Start};
use sagtrip::profile::{parse_spec, DEFAULT_EDGE_S};
use sagtrip::scenario::{settle, EventOptions};

/// An RC low-pass (time constant 2 s, a hundred mains cycles) driven by 10 V DC plus a
/// 5 V, 50 Hz sine: its cycle-boundary values drift slowly while everything else repeats.
const RC_DRIFT: &str = r#"
[part.drive]
kind = "voltage-source"
pins = ["in", "gnd"]
sine = { amplitude = "5V", frequency = "50Hz", offset = "10V" }
[part.r1]
kind = "resistor"
pins = ["in", "out"]
resistance = "200k"
[part.c1]
kind = "capacitor"
pins = ["out", "gnd"]
capacitance = "10u"
"#;

#[test]
fn an_rc_drift_followed_in_envelope_steps_matches_the_closed_form() {
    // First-order RC driven by V0 + A sin(wt) from rest (Hayt, Kemmerly and Durbin,
    // Engineering Circuit Analysis: the forced sinusoidal response plus the natural
    // response): at the sine's rising zero crossings t = kT the capacitor holds
    // (V0 - A w tau / (1 + (w tau)^2)) (1 - exp(-t / tau)).
    let rc = circuit(RC_DRIFT);
    let (period, tau, v0, a) = (0.02, 2.0, 10.0, 5.0);
    let w_tau = 2.0 * std::f64::consts::PI * 50.0 * tau;
    let expected = |t: f64| (v0 - a * w_tau / (1.0 + w_tau * w_tau)) * (1.0 - (-t / tau).exp());
    let out = rc.nodes.iter().position(|n| n == "out").unwrap();
    let end_s = 8.0;
    let mut sim = Simulator::new(&rc, Settings::default());
    let mut state = sim.start(Start::Rest).unwrap();
    let mut follower = EnvelopeFollower::new(&sim, period, EnvelopeSettings::default());
    let mut boundary = period;
    let mut worst = 0.0_f64;
    while boundary <= end_s + 1e-9 {
        let summary = sim.advance_cycle(&mut state, boundary, &mut ()).unwrap();
        worst = worst.max((state.node_voltage(out) - expected(state.time)).abs());
        follower.observe(&state, &summary);
        boundary += period;
        if let Some(jump) = follower
            .try_step(&mut sim, &mut state, end_s + 1e-9, None)
            .unwrap()
        {
            state = jump.state;
            boundary += jump.cycles as f64 * period;
        }
    }
    assert!(
        (state.time - end_s).abs() < 1e-9,
        "ended at {} s",
        state.time
    );
    // Four time constants: most of the 400 cycles are jumped, none of the 0.1 mV is lost.
    assert!(
        state.stats.cycles_jumped > 300,
        "{} cycles jumped",
        state.stats.cycles_jumped
    );
    assert!(worst < 1e-4, "worst boundary error {worst} V");
}

#[test]
fn the_compressor_guard_reconnects_after_the_same_delay_with_and_without_shortcuts() {
    // examples/guard-230v-compressor.toml waits about three minutes (about 10 000 mains
    // cycles) before it reconnects. Envelope following must give plain stepping's
    // verdicts, its trip latency within 0.1 ms and its restore latency within 1 ms (5 parts
    // in a million of the delay; each plain step is itself only held to 7e-5 relative).
    let text = std::fs::read_to_string(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/examples/guard-230v-compressor.toml"
    ))
    .unwrap();
    let guard = circuit(&text);
    let profile = parse_spec("interrupt:10cyc", DEFAULT_EDGE_S).unwrap();
    let run = |skip_steady| {
        let options = EventOptions {
            skip_steady,
            ..EventOptions::default()
        };
        settle(&guard, &options)
            .unwrap()
            .run(&guard, &profile)
            .unwrap()
    };
    let (fast, plain) = (run(true), run(false));
    assert_eq!(plain.stats.cycles_jumped, 0);
    assert!(
        fast.stats.cycles_jumped > 10_000,
        "{} cycles jumped",
        fast.stats.cycles_jumped
    );
    let (f, p) = (&fast.measurements, &plain.measurements);
    assert!(f.tripped && p.tripped);
    assert!(fast.settled_after && plain.settled_after);
    let trip = (f.trip_latency_ms.unwrap() - p.trip_latency_ms.unwrap()).abs();
    assert!(trip <= 0.1, "trip latency differs by {trip} ms");
    let (fr, pr) = (f.restore_latency_ms.unwrap(), p.restore_latency_ms.unwrap());
    // About 196 s: c_delay (470 uF through 1.3 Mohm) reaching the 3.3 V where q_drive
    // passes the coil's pick-up current, -611 s ln(1 - 3.3/12), common practice for a
    // reconnection delay of this kind.
    assert!((150e3..250e3).contains(&pr), "restore latency {pr} ms");
    assert!((fr - pr).abs() <= 1.0, "restore latency {fr} ms vs {pr} ms");
    assert!(fast.stats.accepted_steps * 3 < plain.stats.accepted_steps);
}
