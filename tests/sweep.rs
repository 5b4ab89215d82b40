//! Sweeps: the refined boundary against a dense grid of the same circuit.

mod common;

use common::circuit;
use sagtrip::profile::DEFAULT_EDGE_S;
use sagtrip::scenario::{settle, EventOptions};
use sagtrip::sweep::{cells, refine_boundary, run_grid, Grid, Outcome};

#[test]
fn refined_boundary_agrees_with_a_dense_grid() {
    let guard = circuit(sagtrip::builtin::REFERENCE_GUARD);
    let options = EventOptions {
        restore_limit_s: Some(0.2),
        ..EventOptions::default()
    };
    let settled = settle(&guard, &options).unwrap();
    let duration = 0.3;
    let phases = [0.0];
    // Dense grid: 1% steps across the under-voltage threshold (about 87% of nominal).
    let grid = Grid {
        levels_pct: (80..=95).map(f64::from).collect(),
        durations_s: vec![duration],
        phases_deg: phases.to_vec(),
    };
    let points = run_grid(&settled, &guard, &grid, DEFAULT_EDGE_S, &|| {});
    let map = cells(&points);
    let highest_trip = map
        .iter()
        .filter(|c| matches!(c.outcome, Outcome::Trips | Outcome::Chatters))
        .map(|c| c.level_pct)
        .fold(f64::NEG_INFINITY, f64::max);
    let lowest_ride = map
        .iter()
        .filter(|c| c.outcome == Outcome::RidesThrough)
        .map(|c| c.level_pct)
        .fold(f64::INFINITY, f64::min);
    // Deeper dips trip, shallower ones ride through, with one transition.
    assert!(highest_trip < lowest_ride, "{map:?}");
    assert!(lowest_ride - highest_trip <= 1.0 + 1e-9);
    let b = refine_boundary(
        &settled,
        &guard,
        duration,
        &phases,
        (0.0, 100.0),
        0.5,
        DEFAULT_EDGE_S,
    )
    .unwrap();
    let level = b.level_pct.unwrap();
    assert!(b.resolution_pct <= 0.5);
    assert!(
        level >= highest_trip - 0.5 && level <= lowest_ride + 0.5,
        "refined {level} vs grid transition between {highest_trip} and {lowest_ride}"
    );
    // Reference-guard.md: under-voltage trips somewhere near 200 V of 230 V (87%).
    assert!((level - 87.0).abs() < 2.0, "{level}");
}

#[test]
fn a_sweep_point_order_is_the_grid_order_whatever_the_threads() {
    let guard = circuit(sagtrip::builtin::REFERENCE_GUARD);
    let options = EventOptions {
        restore_limit_s: Some(0.1),
        ..EventOptions::default()
    };
    let settled = settle(&guard, &options).unwrap();
    let grid = Grid {
        levels_pct: vec![0.0, 95.0],
        durations_s: vec![0.01, 0.2],
        phases_deg: vec![0.0, 90.0],
    };
    let points = run_grid(&settled, &guard, &grid, DEFAULT_EDGE_S, &|| {});
    let order: Vec<(f64, f64, f64)> = points
        .iter()
        .map(|p| (p.level_pct, p.duration_s, p.phase_deg))
        .collect();
    assert_eq!(order, grid.points());
    // A half-cycle-ish 10 ms interruption rides through; 200 ms at 0% trips.
    assert_eq!(points[0].outcome, Outcome::RidesThrough);
    assert_eq!(points[2].outcome, Outcome::Trips);
    // A second run gives the same numbers bit for bit (determinism).
    let again = run_grid(&settled, &guard, &grid, DEFAULT_EDGE_S, &|| {});
    assert_eq!(points, again);
}

/// A protector whose boundary has a closed form: a near-ideal peak detector (R C = 1 s) on
/// a 10 V peak, 50 Hz supply, a comparator against a fixed 9.5 V reference, and an ideal
/// switch feeding a relay with a microsecond coil and no travel.
const ANALYTIC: &str = r#"
title = "Peak detector, fixed reference, ideal switch"
[part.mains]
kind = "voltage-source"
pins = ["ac", "gnd"]
sine = { amplitude = "10V", frequency = "50Hz" }
[part.d1]
kind = "diode"
pins = ["ac", "peak"]
saturation_current = "1u"
emission_coefficient = 0.05
[part.c1]
kind = "capacitor"
pins = ["peak", "gnd"]
capacitance = "100u"
[part.r1]
kind = "resistor"
pins = ["peak", "gnd"]
resistance = "10k"
[part.supply]
kind = "voltage-source"
pins = ["vcc", "gnd"]
dc = "15V"
[part.reference]
kind = "voltage-source"
pins = ["ref", "gnd"]
dc = "9.5V"
[part.u1]
kind = "comparator"
pins = { plus = "peak", minus = "ref", output = "decide", supply_plus = "vcc", supply_minus = "gnd" }
[part.r_decide]
kind = "resistor"
pins = ["decide", "gnd"]
resistance = "100k"
[part.s1]
kind = "switch"
pins = { a = "vcc", b = "coil", control_plus = "decide", control_minus = "gnd" }
on_voltage = "5V"
off_voltage = "5V"
on_resistance = "0.01"
[part.k1]
kind = "relay"
pins = { coil_a = "coil", coil_b = "gnd", common = "ac", normally_open = "load" }
coil_resistance = "100"
coil_inductance = "1u"
pickup_current = "50mA"
dropout_current = "40mA"
[part.r_load]
kind = "resistor"
pins = ["load", "gnd"]
resistance = "1k"
"#;

#[test]
fn the_boundary_of_a_peak_detector_matches_its_closed_form() {
    // Derivation. During a long dip to residual r the ideal peak detector is recharged to
    // r Vp at each residual crest and decays for one period T between crests:
    // v(t) = r Vp exp(-t / RC) (RC discharge, Hayt, Kemmerly and Durbin). Its lowest value
    // is r Vp exp(-T / RC); the comparator trips the relay when that falls below Vref. So
    // a long dip trips if and only if r < (Vref / Vp) exp(T / RC):
    // (9.5 / 10) exp(0.02 / 1) = 0.969190 -> 96.919% of nominal.
    let expected = 0.95 * (0.02f64).exp() * 100.0;
    let circuit = circuit(ANALYTIC);
    let options = EventOptions {
        restore_limit_s: Some(0.1),
        ..EventOptions::default()
    };
    let settled = settle(&circuit, &options).unwrap();
    assert!(settled.load_connected(), "the relay picks up at power-up");
    for duration in [0.5, 1.0] {
        let b = refine_boundary(
            &settled,
            &circuit,
            duration,
            &[0.0, 90.0],
            (0.0, 100.0),
            0.25,
            DEFAULT_EDGE_S,
        )
        .unwrap();
        let level = b.level_pct.unwrap();
        // Within the bisection's resolution (0.25%) plus 0.25% for the near-ideal diode's
        // drop and leakage.
        assert!(
            (level - expected).abs() < 0.5,
            "{duration} s: {level}% vs {expected}%"
        );
    }
}

#[test]
fn the_longest_ride_through_agrees_with_a_dense_duration_grid() {
    // A consistency check of the bisection in duration against plain grid points of the
    // same simulator: an interruption (0 %) at two phases, 1 ms steps across the
    // transition. The search must bracket the grid's transition and meet its resolution
    // (1 % of the duration or 0.5 ms, the figure the datasheet needs).
    use sagtrip::sweep::{duration_resolution_s, refine_duration_boundary, DurationSearch};
    let guard = circuit(sagtrip::builtin::REFERENCE_GUARD);
    let options = EventOptions {
        restore_limit_s: Some(0.2),
        ..EventOptions::default()
    };
    let settled = settle(&guard, &options).unwrap();
    let phases = [0.0, 90.0];
    let range = (0.01, 1.0);
    let b = refine_duration_boundary(&settled, &guard, 0.0, &phases, range, &[], DEFAULT_EDGE_S)
        .unwrap();
    assert_eq!(b.status, DurationSearch::Found);
    let (ride, trip) = (
        b.longest_ride_through_s.unwrap(),
        b.shortest_trip_s.unwrap(),
    );
    assert!(
        trip > ride && trip - ride <= duration_resolution_s(ride),
        "{b:?}"
    );
    let grid = Grid {
        levels_pct: vec![0.0],
        durations_s: (0..30)
            .map(|k| ride - 0.015 + 0.001 * f64::from(k))
            .collect(),
        phases_deg: phases.to_vec(),
    };
    let map = cells(&run_grid(&settled, &guard, &grid, DEFAULT_EDGE_S, &|| {}));
    for c in &map {
        let trips = matches!(c.outcome, Outcome::Trips | Outcome::Chatters);
        if c.duration_s <= ride {
            assert!(!trips, "{c:?} trips below the longest ride-through {ride}");
        }
        if c.duration_s >= trip {
            assert!(trips, "{c:?} rides through above the shortest trip {trip}");
        }
    }
    // Known map cells narrow the bracket without changing the answer.
    let coarse = cells(&run_grid(
        &settled,
        &guard,
        &Grid {
            levels_pct: vec![0.0],
            durations_s: vec![0.01, 0.03, 0.1, 0.3, 1.0],
            phases_deg: phases.to_vec(),
        },
        DEFAULT_EDGE_S,
        &|| {},
    ));
    let narrowed = refine_duration_boundary(
        &settled,
        &guard,
        0.0,
        &phases,
        range,
        &coarse,
        DEFAULT_EDGE_S,
    )
    .unwrap();
    assert!(narrowed.runs < b.runs, "{} vs {}", narrowed.runs, b.runs);
    let r = narrowed.longest_ride_through_s.unwrap();
    assert!(
        (r - ride).abs() <= duration_resolution_s(ride),
        "{r} vs {ride}"
    );
    // Ends of the range: a shallow dip that never trips, and a level that trips at once.
    let shallow =
        refine_duration_boundary(&settled, &guard, 95.0, &phases, range, &[], DEFAULT_EDGE_S)
            .unwrap();
    assert_eq!(shallow.status, DurationSearch::RidesThroughAll);
    assert_eq!(shallow.longest_ride_through_s, Some(1.0));
    let early = refine_duration_boundary(
        &settled,
        &guard,
        0.0,
        &phases,
        (0.2, 1.0),
        &[],
        DEFAULT_EDGE_S,
    )
    .unwrap();
    assert_eq!(early.status, DurationSearch::TripsAtAll);
    assert_eq!(early.longest_ride_through_s, None);
}
