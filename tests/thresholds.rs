//! Static thresholds of the reference guard: bisection against the divider rule and the
//! zener applied to the simulated sense node (a consistency check, not an independent
//! derivation: the line-to-sense scale comes from the simulation), and against the slow
//! ramp through each threshold.

mod common;

use common::circuit;
use sagtrip::circuit::Circuit;
use sagtrip::probe::Probe;
use sagtrip::profile::parse_spec;
use sagtrip::scenario::{settle, EventOptions};
use sagtrip::thresholds::{find, StaticThresholds, ThresholdOptions};

fn guard_thresholds() -> StaticThresholds {
    common::guard_thresholds().clone()
}

/// The lowest and highest voltage of node `name` over the settled cycles before an event.
fn settled_extremes(guard: &Circuit, name: &str) -> (f64, f64) {
    let node = guard.node(name).unwrap();
    let options = EventOptions {
        probes: vec![Probe::Voltage { node }],
        ..EventOptions::default()
    };
    let settled = settle(guard, &options).unwrap();
    let run = settled
        .run(guard, &parse_spec("gap:1cyc", 5e-6).unwrap())
        .unwrap();
    let trace = &run.trace;
    let column = trace.column(&Probe::Voltage { node }).unwrap();
    let before: Vec<f64> = trace
        .time
        .iter()
        .zip(column)
        .filter(|(t, _)| **t <= run.onset_s)
        .map(|(_, v)| *v)
        .collect();
    let lo = before.iter().copied().fold(f64::INFINITY, f64::min);
    let hi = before.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    (lo, hi)
}

/// Under- and over-voltage trip levels of the reference guard (or a variant with other
/// zener, `r_top` and `r_bot` values) from the divider rule, volts RMS. A consistency check:
/// the zener and the dividers are worked out here, but the scale from the line to the
/// sense node is read from the simulator's own settled run.
///
/// Ohm's law and the divider rule (from memory): the zener, `vz0` at 5 mA with a 10 ohm
/// slope, is fed from the 12 V rail through 2.2k and loaded by the 1.8k + 2.4k + 5.6k =
/// 9.8k reference divider; the comparators switch when `sense_raw` crosses
/// ref * (`r_top` + `r_bot`) / `r_bot`. The peak detector's output scales with the line voltage:
/// the under-voltage comparator first fires when the ripple's valley reaches `ref_lo`, the
/// over-voltage one when the peak reaches `ref_hi`; the scale is taken from the settled run
/// at nominal, 230 V (transformer regulation is not derived here).
fn divider_rule_thresholds(guard: &Circuit, vz0: f64, r_top: f64, r_bot: f64) -> (f64, f64) {
    let mut vz = vz0;
    for _ in 0..20 {
        let iz = (12.0 - vz) / 2200.0 - vz / 9800.0;
        vz = vz0 + 10.0 * (iz - 5e-3);
    }
    let ref_lo = vz * 5600.0 / 9800.0;
    let ref_hi = vz * (2400.0 + 5600.0) / 9800.0;
    let scale = (r_top + r_bot) / r_bot;
    let (raw_min, raw_max) = settled_extremes(guard, "sense_raw");
    (
        230.0 * ref_lo * scale / raw_min,
        230.0 * ref_hi * scale / raw_max,
    )
}

/// Both trip thresholds within 3% of the divider rule.
fn assert_near_divider_rule(t: &StaticThresholds, uv_rule: f64, ov_rule: f64) {
    let uv = t.under.trip.unwrap().volts;
    let ov = t.over.trip.unwrap().volts;
    eprintln!(
        "under-voltage trip {uv:.1} V (divider rule {uv_rule:.1} V), over {ov:.1} V (divider rule {ov_rule:.1} V)"
    );
    assert!(
        (uv - uv_rule).abs() / uv_rule < 0.03,
        "under-voltage trip {uv:.1} V, divider rule {uv_rule:.1} V"
    );
    assert!(
        (ov - ov_rule).abs() / ov_rule < 0.03,
        "over-voltage trip {ov:.1} V, divider rule {ov_rule:.1} V"
    );
}

#[test]
fn thresholds_agree_with_the_divider_rule_and_the_zener() {
    let t = guard_thresholds();
    let guard = circuit(sagtrip::builtin::REFERENCE_GUARD);
    let (uv_rule, ov_rule) = divider_rule_thresholds(&guard, 5.1, 68e3, 15e3);
    assert_near_divider_rule(&t, uv_rule, ov_rule);
    // Each bracket is within the resolution asked.
    for th in [t.under.trip, t.under.reset, t.over.trip, t.over.reset] {
        let th = th.unwrap();
        assert!(th.bracket_v.1 - th.bracket_v.0 <= 0.1 + 1e-9);
    }
    // The over-voltage side resets below its trip (the relay coil's load leaves the
    // sensing supply when it drops out); nothing resets beyond its own trip.
    assert!(t.over.reset.unwrap().volts <= t.over.trip.unwrap().volts + 0.1);
    assert!(t.under.reset.unwrap().volts >= t.under.trip.unwrap().volts - 0.1);

    // The slow ramp opens the load where the bisection put the trip, late by at most the
    // ramp rate times the protector's response (under 0.1 s here: 66 ms for a deep dip,
    // from the event runs), plus the resolution.
    for side in [&t.under, &t.over] {
        let ramp = side.ramp.as_ref().unwrap();
        let static_v = side.trip.unwrap().volts;
        let opened = ramp.trip_v.unwrap();
        let allowance = ramp.rate_v_per_s * 0.1 + 0.1;
        assert!(
            (opened - static_v).abs() <= allowance,
            "{:?}: ramp opened at {opened:.2} V, static {static_v:.2} V, allowance {allowance:.2} V",
            side.side
        );
    }
    // Without hysteresis in its comparators, the guard's outputs toggle many times on a
    // slow ramp through a threshold (the design's known weakness, see the circuit file).
    let uv_ramp = t.under.ramp.as_ref().unwrap();
    assert!(uv_ramp.comparator_toggles.iter().any(|(_, k)| *k > 10));
}

#[test]
fn the_hysteresis_variant_shows_a_wider_hysteresis() {
    // The variant adds positive feedback to each comparator (see its circuit file): its
    // under-voltage reset lies above its trip by more than the resolution.
    let text = std::fs::read_to_string(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/examples/guard-230v-hysteresis.toml"
    ))
    .unwrap();
    let variant = circuit(&text);
    let settled = settle(&variant, &EventOptions::default()).unwrap();
    let options = ThresholdOptions {
        resolution_v: 0.2,
        ..ThresholdOptions::default()
    };
    let t = find(&settled, &variant, &options).unwrap();
    let base = guard_thresholds();
    let h = t.under.hysteresis_v.unwrap();
    // The circuit file's own hand estimate is "some 9%" of the mains; ask for at least 5%.
    assert!(h > 0.05 * 230.0, "variant {h:.1} V");
    assert!(
        h > base.under.hysteresis_v.unwrap() + 1.0,
        "variant {h:.1} V, reference {:.1} V",
        base.under.hysteresis_v.unwrap()
    );
    assert!(t.under.reset.unwrap().volts > t.under.trip.unwrap().volts);
}

#[test]
fn the_lowest_tolerance_corner_agrees_with_the_divider_rule() {
    // Every toleranced value of the tolerance example at its lower limit (corner 1): the
    // search once stopped here on a Newton failure over a step of a fraction of a
    // picosecond left before a breakpoint by rounding.
    let path = "examples/guard-230v-tolerances.toml";
    let text = std::fs::read_to_string(path).unwrap();
    let nominal = sagtrip::circuit_file::parse_circuit(&text, path).unwrap();
    let lowest = &sagtrip::tolerance::corners(&nominal.tolerances).unwrap()[1];
    let limit = |field: &str| lowest.values[field];
    let guard = sagtrip::circuit_file::parse_circuit_with(&text, path, &lowest.values).unwrap();
    let settled = settle(&guard, &EventOptions::default()).unwrap();
    let t = find(&settled, &guard, &ThresholdOptions::default()).unwrap();
    let (uv_rule, ov_rule) = divider_rule_thresholds(
        &guard,
        limit("part.dz_ref.breakdown_voltage"),
        limit("part.r_top.resistance"),
        limit("part.r_bot.resistance"),
    );
    assert_near_divider_rule(&t, uv_rule, ov_rule);
}
