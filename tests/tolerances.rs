//! Tolerances written in circuit files: both forms, their limits, cases that replace the
//! written values, and the mistakes reported with their place.

use std::collections::HashMap;

use sagtrip::circuit::PartSpec;
use sagtrip::circuit_file::{parse_circuit, parse_circuit_with};

const RC: &str = r#"
title = "RC with tolerances"
[part.v1]
kind = "voltage-source"
pins = { plus = "in", minus = "gnd" }
dc = "10V"
[part.r1]
kind = "resistor"
pins = ["in", "out"]
resistance = "1k ±5%"
[part.c1]
kind = "capacitor"
pins = ["out", "gnd"]
capacitance = { value = "1u", min = "0.8u", max = "1.2u" }
[part.r2]
kind = "resistor"
pins = ["out", "gnd"]
resistance = "10k +-20ohm"
"#;

fn resistance(c: &sagtrip::circuit::Circuit, name: &str) -> f64 {
    match c.parts[c.part(name).unwrap()].spec {
        PartSpec::Resistor { resistance } => resistance,
        _ => panic!("{name} is not a resistor"),
    }
}

#[test]
fn both_forms_give_the_written_value_and_its_limits() {
    let c = parse_circuit(RC, "rc.toml").unwrap();
    assert_eq!(resistance(&c, "r1"), 1000.0);
    let t: Vec<(&str, f64, f64, f64, usize)> = c
        .tolerances
        .iter()
        .map(|t| (t.field.as_str(), t.nominal, t.min, t.max, t.line))
        .collect();
    // 5% of 1 kohm is 50 ohm; an absolute 20 ohm on 10 kohm (arithmetic).
    assert_eq!(t[0], ("part.r1.resistance", 1000.0, 950.0, 1050.0, 10));
    assert_eq!(t[1].0, "part.c1.capacitance");
    assert!((t[1].2 - 0.8e-6).abs() < 1e-18 && (t[1].3 - 1.2e-6).abs() < 1e-18);
    assert_eq!(
        t[2],
        ("part.r2.resistance", 10_000.0, 9_980.0, 10_020.0, 18)
    );
}

#[test]
fn a_case_replaces_the_written_values_inside_the_limits() {
    let case = HashMap::from([
        ("part.r1.resistance".to_string(), 1050.0),
        ("part.c1.capacitance".to_string(), 0.8e-6),
    ]);
    let c = parse_circuit_with(RC, "rc.toml", &case).unwrap();
    assert_eq!(resistance(&c, "r1"), 1050.0);
    match c.parts[c.part("c1").unwrap()].spec {
        PartSpec::Capacitor { capacitance, .. } => assert_eq!(capacitance, 0.8e-6),
        _ => unreachable!(),
    }
    // Outside the limits, or a field with no tolerance: refused with the place.
    let outside = HashMap::from([("part.r1.resistance".to_string(), 1100.0)]);
    let err = parse_circuit_with(RC, "rc.toml", &outside).unwrap_err();
    assert_eq!(err.problems[0].line, 10);
    assert!(err.problems[0].message.contains("outside the tolerance"));
    let unknown = HashMap::from([("part.v1.dc".to_string(), 9.0)]);
    assert!(parse_circuit_with(RC, "rc.toml", &unknown).is_err());
}

#[test]
fn tolerance_mistakes_are_reported_with_their_place() {
    let bad = RC.replace("\"1k ±5%\"", "\"1k ±x%\"");
    let err = parse_circuit(&bad, "rc.toml").unwrap_err();
    assert_eq!(
        (err.problems[0].line, err.problems[0].field.as_str()),
        (10, "part.r1.resistance")
    );
    assert!(err.problems[0].message.contains("tolerance"));
    // A resistance must stay positive at its lower limit.
    let bad = RC.replace("\"1k ±5%\"", "\"1k ±150%\"");
    let err = parse_circuit(&bad, "rc.toml").unwrap_err();
    assert!(
        err.problems[0].message.contains("must be positive"),
        "{err}"
    );
    // Limits must hold the value, and all three must be given.
    let bad = RC.replace("min = \"0.8u\"", "min = \"1.1u\"");
    let err = parse_circuit(&bad, "rc.toml").unwrap_err();
    assert!(
        err.problems[0].message.contains("min <= value <= max"),
        "{err}"
    );
    let bad = RC.replace(", max = \"1.2u\"", "");
    let err = parse_circuit(&bad, "rc.toml").unwrap_err();
    assert!(err.problems[0].message.contains("needs all of"), "{err}");
}
