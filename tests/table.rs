//! The datasheet table: its default plan against the standard's list, its plan files and
//! the consistency of its spreads.

mod common;

use common::circuit;
use sagtrip::profile::{Duration, Step};
use sagtrip::scenario::{settle, EventOptions};
use sagtrip::table::{default_plan, parse_plan, run_tests, Spread};

/// (residual, cycles at 50 Hz, cycles at 60 Hz) of each dip or interruption step.
fn steps(plan: &sagtrip::table::Plan) -> Vec<(String, f64, f64)> {
    plan.tests
        .iter()
        .filter(|t| t.source.starts_with("IEC"))
        .map(|t| match t.profile.steps[0] {
            Step::Dip {
                residual,
                duration: Duration::Cycles(c),
            } => ("dip".to_string(), residual, c),
            Step::Variation {
                residual,
                increase: Duration::Cycles(c),
                ..
            } => ("variation".to_string(), residual, c),
            ref other => panic!("unexpected step {other:?}"),
        })
        .collect()
}

#[test]
fn the_default_rows_are_the_preferred_tests_of_the_class() {
    // IEC 61000-4-11:2020 Table 1 (dips: class 2: 0% for 0.5 and 1 cycle, 70% for 25/30
    // cycles; class 3 adds 40% for 10/12 and 80% for 250/300 cycles), Table 2 (short
    // interruptions: 0% for 250/300 cycles), Table 3 (variation to 70%, from memory: abrupt
    // fall, 1 cycle at 70%, back over 25/30 cycles).
    let class3_50 = vec![
        ("dip".to_string(), 0.0, 0.5),
        ("dip".to_string(), 0.0, 1.0),
        ("dip".to_string(), 0.4, 10.0),
        ("dip".to_string(), 0.7, 25.0),
        ("dip".to_string(), 0.8, 250.0),
        ("dip".to_string(), 0.0, 250.0),
        ("variation".to_string(), 0.7, 25.0),
    ];
    assert_eq!(steps(&default_plan(3, 50.0).unwrap()), class3_50);
    let class3_60: Vec<(String, f64, f64)> = vec![
        ("dip".to_string(), 0.0, 0.5),
        ("dip".to_string(), 0.0, 1.0),
        ("dip".to_string(), 0.4, 12.0),
        ("dip".to_string(), 0.7, 30.0),
        ("dip".to_string(), 0.8, 300.0),
        ("dip".to_string(), 0.0, 300.0),
        ("variation".to_string(), 0.7, 30.0),
    ];
    assert_eq!(steps(&default_plan(3, 60.0).unwrap()), class3_60);
    let class2_50 = vec![
        ("dip".to_string(), 0.0, 0.5),
        ("dip".to_string(), 0.0, 1.0),
        ("dip".to_string(), 0.7, 25.0),
        ("dip".to_string(), 0.0, 250.0),
        ("variation".to_string(), 0.7, 25.0),
    ];
    assert_eq!(steps(&default_plan(2, 50.0).unwrap()), class2_50);
    // Sources name the standard's table.
    let plan = default_plan(3, 50.0).unwrap();
    assert!(plan.tests[0].source.contains("Table 1"));
    assert!(plan.tests[5].source.contains("Table 2"));
    assert!(plan.tests[6].source.contains("Table 3"));
    assert_eq!(plan.phases, [0.0, 90.0, 180.0, 270.0]);
    assert!(default_plan(1, 50.0).is_err());
}

#[test]
fn spreads_are_ordered_and_the_median_is_typical() {
    assert_eq!(Spread::of(&[]), None);
    let s = Spread::of(&[3.0, 1.0, 2.0]).unwrap();
    assert_eq!((s.min, s.typical, s.max), (1.0, 2.0, 3.0));
    let s = Spread::of(&[4.0, 1.0, 2.0, 3.0]).unwrap();
    assert_eq!((s.min, s.typical, s.max), (1.0, 2.5, 4.0));
}

#[test]
fn a_small_plan_runs_with_ordered_spreads_and_reproducibly() {
    let guard = circuit(sagtrip::builtin::REFERENCE_GUARD);
    let text = r#"
title = "small"
phases = [0, 90, 180]
thresholds = false

[[test]]
name = "deep"
event = "dip:40%:10cyc"

[[test]]
name = "short"
event = "interrupt:0.5cyc"

[[test]]
name = "swell"
event = "swell:130%:5cyc"
"#;
    let plan = parse_plan(text, "small.toml", 50.0).unwrap();
    let settled = common::settled_guard();
    let rows = run_tests(settled, &guard, &plan, &|| {}).unwrap();
    assert_eq!(rows.len(), 3);
    assert_eq!(rows[0].outcome, "trips");
    // Half a cycle without supply: the sense capacitor holds the peak (RC decay, handbook:
    // tau = 4.7 uF x 83 kohm = 0.39 s, so 10 ms lose about 2.5%, well short of the 13%
    // drop to the under-voltage threshold), so the guard rides it through.
    assert_eq!(rows[1].outcome, "rides through");
    assert_eq!(rows[2].outcome, "trips");
    // A consistency check of the table's assembly: the deep dip's spread is the smallest,
    // the median and the largest of the same event run alone at each phase.
    let mut alone: Vec<f64> = plan
        .phases
        .iter()
        .map(|&phase| {
            let mut profile = plan.tests[0].profile.clone();
            profile.phase_deg = phase;
            settled
                .run(&guard, &profile)
                .unwrap()
                .measurements
                .trip_latency_ms
                .unwrap()
        })
        .collect();
    alone.sort_by(f64::total_cmp);
    let spread = rows[0].trip_latency_ms.unwrap();
    assert_eq!(
        (spread.min, spread.typical, spread.max),
        (alone[0], alone[1], alone[2])
    );
    // The phases differ: the spread is not one value three times.
    assert!(alone[2] > alone[0], "{alone:?}");
    // The same plan gives the same table.
    let again = run_tests(settled, &guard, &plan, &|| {}).unwrap();
    assert_eq!(
        serde_json::to_string(&rows).unwrap(),
        serde_json::to_string(&again).unwrap()
    );
}

#[test]
fn plan_file_mistakes_are_reported_with_their_place() {
    let bad = "[[test]]\nname = \"x\"\nevent = \"dip:40%:10cycles\"\n";
    let err = parse_plan(bad, "plan.toml", 50.0).unwrap_err();
    assert_eq!((err.line, err.field.as_str()), (3, "test.1.event"));
    assert_eq!(err.column, 18, "{err}");
    let bad = "phases = []\n[[test]]\nname = \"x\"\nevent = \"interrupt:1cyc\"\n";
    let err = parse_plan(bad, "plan.toml", 50.0).unwrap_err();
    assert_eq!((err.line, err.field.as_str()), (1, "phases"));
    let bad = "[[test]]\nname = \"x\"\nevnt = \"interrupt:1cyc\"\n";
    let err = parse_plan(bad, "plan.toml", 50.0).unwrap_err();
    assert_eq!(err.line, 3, "{err}");
    let bad = "thresholds = false\n";
    assert!(parse_plan(bad, "plan.toml", 50.0).is_err());
}

/// The reference guard with a tolerance on its lower sense resistor.
fn guard_with_r_bot(tolerance: &str) -> String {
    let text = sagtrip::builtin::REFERENCE_GUARD;
    assert_eq!(text.matches("resistance = \"15k\"").count(), 1);
    text.replace(
        "resistance = \"15k\"",
        &format!("resistance = \"15k {tolerance}\""),
    )
}

fn trip_spread_over_corners(text: &str) -> Spread {
    use sagtrip::circuit_file::parse_circuit_with;
    let nominal = circuit(text);
    let cases = sagtrip::tolerance::corners(&nominal.tolerances).unwrap();
    let built: Vec<(sagtrip::circuit::Circuit, sagtrip::scenario::Settled)> = cases
        .iter()
        .map(|case| {
            let c = parse_circuit_with(text, "guard", &case.values).unwrap();
            let s = settle(&c, &EventOptions::default()).unwrap();
            (c, s)
        })
        .collect();
    let refs: Vec<_> = built.iter().map(|(c, s)| (s, c)).collect();
    let plan = parse_plan(
        "thresholds = false\nphases = [0]\n[[test]]\nname = \"d\"\nevent = \"dip:40%:10cyc\"\n",
        "p.toml",
        50.0,
    )
    .unwrap();
    let rows = sagtrip::table::run_cases(&refs, &plan, &|| {}).unwrap();
    rows[0].trip_latency_ms.unwrap()
}

#[test]
fn widening_a_tolerance_never_narrows_the_spread() {
    // A smaller r_bot lowers the sensed voltage, so a dip reaches the under-voltage
    // threshold sooner: the trip latency moves monotonically with r_bot (the divider rule),
    // and the corners of a wider tolerance enclose those of a narrower one.
    let narrow = trip_spread_over_corners(&guard_with_r_bot("±1%"));
    let wide = trip_spread_over_corners(&guard_with_r_bot("±5%"));
    assert!(
        wide.min <= narrow.min && narrow.max <= wide.max,
        "{narrow:?} {wide:?}"
    );
    assert!(wide.max - wide.min > narrow.max - narrow.min);
}

#[test]
fn screening_keeps_the_value_that_sets_the_thresholds() {
    // r_bot (±5%) scales every threshold by the divider rule; the load resistor (±5%) sits
    // on the ideal mains source behind the relay contact and moves nothing the protector
    // senses. Screening for one value must keep r_bot, and its largest change must match
    // the divider rule (Ohm's law, from memory): a threshold V scales with
    // (r_top + r_bot) / r_bot. Within 10%: the divider also loads the peak detector.
    let text = guard_with_r_bot("±5%");
    assert_eq!(text.matches("resistance = \"52.9\"").count(), 1);
    let text = text.replace("resistance = \"52.9\"", "resistance = \"52.9 ±5%\"");
    let guard = circuit(&text);
    let plan = sagtrip::table::Plan {
        title: "thresholds only".into(),
        tests: Vec::new(),
        phases: vec![0.0],
        thresholds: true,
        ride_through_levels: Vec::new(),
        threshold_options: sagtrip::thresholds::ThresholdOptions::default(),
    };
    let options = EventOptions::default();
    let source = sagtrip::table::Source {
        text: &text,
        path: "guard",
        circuit: &guard,
    };
    let effects = sagtrip::table::screen_values(source, &options, &plan, 1, &|| {})
        .unwrap()
        .effects;
    assert_eq!(effects.len(), 2);
    assert_eq!(effects[0].field, "part.r_bot.resistance");
    assert!(effects[0].kept && !effects[1].kept);
    assert_eq!(effects[1].field, "part.load.resistance");
    // Only the bisection's resolution (0.1 V) may move with the load.
    assert!(effects[1].change <= 0.1 + 1e-9, "{effects:?}");
    // r_bot has all of every threshold's spread (the load moves none), so its share is
    // 100% for each; the change reported is the first threshold's, the under-voltage trip,
    // between r_bot = 14.25k and 15.75k. A consistency check: the nominal trip comes from
    // the simulator, the divider rule gives its change.
    assert_eq!(effects[0].percent, 100.0);
    assert_eq!(effects[0].quantity, "under-voltage trip", "{effects:?}");
    let settled = settle(&guard, &options).unwrap();
    let nominal = sagtrip::thresholds::find(
        &settled,
        &guard,
        &sagtrip::thresholds::ThresholdOptions::default(),
    )
    .unwrap();
    let uv = nominal.under.trip.unwrap().volts;
    let ratio = |r_bot: f64| (68e3 + r_bot) / r_bot;
    let rule = uv * (ratio(14.25e3) - ratio(15.75e3)) / ratio(15e3);
    eprintln!(
        "screened {:.2} V, divider rule {rule:.2} V",
        effects[0].change
    );
    assert!(
        (effects[0].change - rule).abs() < 0.1 * rule,
        "screened {:.2} V, divider rule {rule:.2} V",
        effects[0].change
    );
}

#[test]
fn screening_ranks_thresholds_and_latencies_on_one_scale() {
    // The tolerance example: c_sense ±20% moves the 40% dip's trip latency by tens of
    // percent and the under-voltage trip through the ripple valley; dz_ref ±2%, r_top and
    // r_bot ±1% set the thresholds (the divider rule and the zener, from memory). Every
    // value moves some threshold by volts, so screening to two values cannot give the full
    // corners' spread by itself: the table must say by how much each spread may fall short,
    // and that allowance must cover the full corners (first order: within 1 V).
    use sagtrip::table::{build, Cases, Source};
    let path = "examples/guard-230v-tolerances.toml";
    let text = std::fs::read_to_string(path).unwrap();
    let guard = sagtrip::circuit_file::parse_circuit(&text, path).unwrap();
    let mut plan = parse_plan(
        "phases = [0]\nride_through_levels = []\n[[test]]\nname = \"dip\"\nevent = \"dip:40%:10cyc\"\n",
        "p.toml",
        50.0,
    )
    .unwrap();
    plan.threshold_options = sagtrip::thresholds::ThresholdOptions {
        resolution_v: 0.2,
        hold_s: 1.0,
        ramp_s: 2.0,
        ..Default::default()
    };
    let source = Source {
        text: &text,
        path,
        circuit: &guard,
    };
    let options = EventOptions::default();
    let (screened, _) = build(
        source,
        &options,
        &plan,
        Cases::Corners { screen: Some(2) },
        &(),
    )
    .unwrap();
    let (full, _) = build(
        source,
        &options,
        &plan,
        Cases::Corners { screen: None },
        &(),
    )
    .unwrap();
    let effects = &screened.screening.effects;
    let kept: Vec<&str> = effects
        .iter()
        .filter(|e| e.kept)
        .map(|e| e.field.as_str())
        .collect();
    eprintln!("{effects:#?}\n{:?}", screened.screening.allowance);
    // The zener sets every threshold and is the largest share of the thresholds' spread.
    assert!(kept.contains(&"part.dz_ref.breakdown_voltage"), "{kept:?}");
    let (s, f) = (
        screened.threshold_spread.unwrap(),
        full.threshold_spread.unwrap(),
    );
    let allowance = |name: &str| {
        screened
            .screening
            .allowance
            .iter()
            .find(|(n, _)| n == name)
            .map_or(0.0, |(_, a)| *a)
    };
    for (name, a, b) in [
        ("under-voltage trip", s.under_trip_v, f.under_trip_v),
        ("over-voltage trip", s.over_trip_v, f.over_trip_v),
        ("under-voltage reset", s.under_reset_v, f.under_reset_v),
        ("over-voltage reset", s.over_reset_v, f.over_reset_v),
    ] {
        let (a, b, w) = (a.unwrap(), b.unwrap(), allowance(name));
        eprintln!("{name}: screened {a:?} ± {w:.2}, full {b:?}");
        assert!(
            a.min - w <= b.min + 1.0 && a.max + w >= b.max - 1.0,
            "{name}"
        );
        // And the allowance is not a blanket: it stays within 1 V of the shortfall.
        let shortfall = (a.min - b.min).max(b.max - a.max).max(0.0);
        assert!(
            w <= shortfall + 1.0,
            "{name}: allowance {w} for {shortfall}"
        );
    }
}
