//! Every kind of mistake in a circuit file gets a message with line, column and field.

mod common;

use common::rejected;

const GOOD_TAIL: &str = r#"
[part.supply]
kind = "voltage-source"
pins = ["a", "gnd"]
dc = "5V"
[part.r_load]
kind = "resistor"
pins = ["a", "gnd"]
resistance = "1k"
"#;

/// Asserts one problem mentions `field` and `words`, at `line` (1-based).
fn check(text: &str, line: usize, field: &str, words: &str) {
    let error = rejected(text);
    let rendered = error.to_string();
    let hit = error
        .problems
        .iter()
        .find(|p| p.field == field)
        .unwrap_or_else(|| {
            panic!("no problem for field `{field}` in:\n{rendered}");
        });
    assert!(
        hit.message.contains(words),
        "message `{}` lacks `{words}`",
        hit.message
    );
    assert_eq!(hit.line, line, "{rendered}");
    assert!(rendered.contains(&format!("bad.toml:{}:{}:", hit.line, hit.column)));
}

#[test]
fn unknown_part_kind() {
    let text =
        format!("{GOOD_TAIL}[part.x1]\nkind = \"flux-capacitor\"\npins = [\"a\", \"gnd\"]\n");
    check(
        &text,
        11,
        "part.x1.kind",
        "unknown part kind `flux-capacitor`",
    );
}

#[test]
fn unknown_parameter() {
    let text = GOOD_TAIL.replace(
        "resistance = \"1k\"",
        "resistance = \"1k\"\ntolerance_band = 3",
    );
    check(
        &text,
        10,
        "part.r_load.tolerance_band",
        "unknown parameter `tolerance_band`",
    );
}

#[test]
fn missing_and_extra_pins() {
    let text = GOOD_TAIL.replace(
        "pins = [\"a\", \"gnd\"]\nresistance",
        "pins = [\"a\"]\nresistance",
    );
    check(&text, 8, "part.r_load.pins", "has 2 pins");
    let text = GOOD_TAIL.replace(
        "pins = [\"a\", \"gnd\"]\nresistance",
        "pins = { a = \"a\", b = \"gnd\", c = \"x\" }\nresistance",
    );
    check(&text, 8, "part.r_load.pins.c", "extra pin `c`");
    let text = GOOD_TAIL.replace(
        "pins = [\"a\", \"gnd\"]\nresistance",
        "pins = { a = \"a\" }\nresistance",
    );
    check(&text, 8, "part.r_load.pins", "missing pin b");
}

#[test]
fn duplicate_part_names() {
    let text = format!(
        "{GOOD_TAIL}[part.r_load]\nkind = \"resistor\"\npins = [\"a\", \"gnd\"]\nresistance = 5\n"
    );
    let error = rejected(&text);
    let p = &error.problems[0];
    assert_eq!(p.field, "(syntax)");
    assert!(p.message.contains("duplicate"), "{}", p.message);
    assert_eq!(p.line, 10);
}

#[test]
fn node_with_one_connection() {
    let text = format!("{GOOD_TAIL}[part.r_dangling]\nkind = \"resistor\"\npins = [\"a\", \"nowhere\"]\nresistance = 5\n");
    check(
        &text,
        12,
        "part.r_dangling.pins.b",
        "node `nowhere` has only one connection",
    );
}

#[test]
fn floating_group_is_named() {
    let text = format!(
        "{GOOD_TAIL}[part.r_x]\nkind = \"resistor\"\npins = [\"x\", \"y\"]\nresistance = 5\n[part.r_y]\nkind = \"resistor\"\npins = [\"y\", \"x\"]\nresistance = 5\n"
    );
    check(&text, 12, "part.r_x.pins", "no path to gnd from nodes x, y");
}

#[test]
fn loop_of_voltage_sources() {
    let text = format!(
        "{GOOD_TAIL}[part.supply2]\nkind = \"voltage-source\"\npins = [\"a\", \"gnd\"]\ndc = 3\n"
    );
    check(&text, 10, "part.supply2", "loop of voltage sources");
    let rendered = rejected(&text).to_string();
    assert!(rendered.contains("supply -> supply2"), "{rendered}");
}

#[test]
fn loop_of_ideal_inductors() {
    let text = format!(
        "{GOOD_TAIL}[part.l1]\nkind = \"inductor\"\npins = [\"a\", \"b\"]\ninductance = \"1m\"\n[part.l2]\nkind = \"inductor\"\npins = [\"b\", \"gnd\"]\ninductance = \"1m\"\n"
    );
    // supply, l1 and l2 close a loop with no resistance.
    check(&text, 14, "part.l2", "l1 -> supply -> l2");
    // With winding resistance the loop is well posed.
    let fixed = text.replace(
        "inductance = \"1m\"\n[part.l2]",
        "inductance = \"1m\"\nseries_resistance = 1\n[part.l2]",
    );
    assert!(sagtrip::circuit_file::parse_circuit(&fixed, "ok.toml").is_ok());
}

#[test]
fn non_positive_values() {
    let text = GOOD_TAIL.replace("resistance = \"1k\"", "resistance = \"-1k\"");
    check(&text, 9, "part.r_load.resistance", "must be positive");
    let text = format!(
        "{GOOD_TAIL}[part.c1]\nkind = \"capacitor\"\npins = [\"a\", \"gnd\"]\ncapacitance = 0\n"
    );
    check(&text, 13, "part.c1.capacitance", "must be positive");
    let text = format!("{GOOD_TAIL}[part.l1]\nkind = \"inductor\"\npins = [\"a\", \"gnd\"]\ninductance = \"-2mH\"\nseries_resistance = 1\n");
    check(&text, 13, "part.l1.inductance", "must be positive");
}

#[test]
fn unknown_parameter_set() {
    let text = format!(
        "[parameter_set.fast]\nkind = \"diode\"\nsaturation_current = \"1n\"\n{GOOD_TAIL}[part.d1]\nkind = \"diode\"\npins = [\"a\", \"gnd\"]\nuses = \"slow\"\n"
    );
    check(
        &text,
        16,
        "part.d1.uses",
        "unknown parameter set `slow` (known diode sets: fast)",
    );
}

#[test]
fn bad_value_syntax_and_wrong_unit() {
    let text = GOOD_TAIL.replace("resistance = \"1k\"", "resistance = \"1kV\"");
    check(&text, 9, "part.r_load.resistance", "unknown suffix");
    let text = GOOD_TAIL.replace("resistance = \"1k\"", "resistance = true");
    check(&text, 9, "part.r_load.resistance", "found a boolean");
}

#[test]
fn missing_required_parameter_and_kind() {
    let text = GOOD_TAIL.replace("resistance = \"1k\"\n", "");
    check(&text, 6, "part.r_load", "missing parameter resistance");
    let text = GOOD_TAIL.replace("kind = \"resistor\"\n", "");
    check(&text, 6, "part.r_load", "missing `kind`");
}

#[test]
fn every_problem_is_reported_at_once() {
    let text = GOOD_TAIL
        .replace("resistance = \"1k\"", "resistance = 0")
        .replace("dc = \"5V\"", "dc = \"5V\"\nwobble = 1");
    let error = rejected(&text);
    assert_eq!(error.problems.len(), 2, "{error}");
    // The rendering shows the offending line with a marker under it.
    let rendered = error.to_string();
    assert!(rendered.contains("bad.toml has 2 problems"));
    assert!(rendered.contains("| resistance = 0"));
    assert!(rendered.contains('^'));
}

#[test]
fn source_needs_exactly_one_waveform() {
    let text = GOOD_TAIL.replace(
        "dc = \"5V\"",
        "dc = \"5V\"\nsine = { rms = 1, frequency = 50 }",
    );
    check(&text, 6, "part.supply", "exactly one waveform");
    let text = GOOD_TAIL.replace("dc = \"5V\"", "sine = { rms = 1 }");
    check(&text, 5, "part.supply.sine", "missing `frequency`");
}

#[test]
fn a_flag_is_a_toml_boolean() {
    // docs/circuit-format.md: `body_diode` is a TOML boolean (`body_diode = false`).
    let mosfet = |value: &str| {
        format!(
            "[part.m1]\nkind = \"nmos\"\npins = {{ drain = \"a\", gate = \"a\", source = \"gnd\" }}\n\
             threshold_voltage = \"2V\"\ntransconductance = \"0.5\"\nbody_diode = {value}\n{GOOD_TAIL}"
        )
    };
    let circuit = common::circuit(&mosfet("false"));
    let m1 = circuit.part("m1").unwrap();
    match &circuit.parts[m1].spec {
        sagtrip::circuit::PartSpec::Mosfet(m) => assert!(m.body_diode.is_none()),
        other => panic!("{other:?}"),
    }
    let circuit = common::circuit(&mosfet("true"));
    match &circuit.parts[m1].spec {
        sagtrip::circuit::PartSpec::Mosfet(m) => assert!(m.body_diode.is_some()),
        other => panic!("{other:?}"),
    }
    check(
        &mosfet("1"),
        6,
        "part.m1.body_diode",
        "expected true or false, found an integer",
    );
    check(
        &mosfet("\"no\""),
        6,
        "part.m1.body_diode",
        "expected true or false",
    );
}

#[test]
fn values_beyond_any_real_part_are_refused_naming_the_part() {
    // A femtohenry coil, a 1e308 F capacitor or a 1e5-bounce contact would stall or
    // overflow the engine; the limits are far beyond real parts on both sides (common
    // practice: 1 fF and 1 pH are parasitic levels, 10 kF the largest supercapacitors).
    let text = format!(
        "{GOOD_TAIL}\n[part.c_huge]\nkind = \"capacitor\"\npins = [\"a\", \"gnd\"]\n\
         capacitance = \"1e308\"\n[part.l_tiny]\nkind = \"inductor\"\npins = [\"a\", \"b\"]\n\
         inductance = \"1e-18H\"\n[part.r_tiny]\nkind = \"resistor\"\npins = [\"b\", \"gnd\"]\n\
         resistance = \"1e-300\"\n"
    );
    check(&text, 14, "part.c_huge.capacitance", "beyond any real part");
    check(
        &text,
        18,
        "part.l_tiny.inductance",
        "allowed from 1e-12 to 1e4 H",
    );
    check(&text, 22, "part.r_tiny.resistance", "1e-300 ohm");
    // Zero stays allowed where the field allows it (a winding without resistance).
    let zero = format!(
        "{GOOD_TAIL}\n[part.l]\nkind = \"inductor\"\npins = [\"a\", \"b\"]\n\
         inductance = \"1mH\"\nseries_resistance = \"0\"\n[part.r_b]\nkind = \"resistor\"\n\
         pins = [\"b\", \"gnd\"]\nresistance = \"1k\"\n"
    );
    common::circuit(&zero);
}

#[test]
fn nodes_held_only_by_current_sources_are_undetermined() {
    // Two current sources in series leave the node between them without a voltage (it
    // read -1e12 V); a current source feeding an inductor forces its current (it rang from
    // -30 to +50 V). Both are the duals of a loop of voltage sources (circuit theory, from
    // memory).
    let series = "[part.i1]\nkind = \"current-source\"\npins = [\"gnd\", \"a\"]\ndc = \"1mA\"\n\
                  [part.i2]\nkind = \"current-source\"\npins = [\"a\", \"b\"]\ndc = \"2mA\"\n\
                  [part.r]\nkind = \"resistor\"\npins = [\"b\", \"gnd\"]\nresistance = \"1k\"\n";
    check(
        series,
        3,
        "part.i1.pins",
        "a current source is no connection",
    );
    let coil = "[part.i1]\nkind = \"current-source\"\npins = [\"gnd\", \"a\"]\ndc = \"10mA\"\n\
                [part.l]\nkind = \"inductor\"\npins = [\"a\", \"b\"]\ninductance = \"1H\"\n\
                [part.r]\nkind = \"resistor\"\npins = [\"b\", \"gnd\"]\nresistance = \"1k\"\n";
    check(
        coil,
        1,
        "part.i1",
        "node a meets the rest of the circuit only through",
    );
    // A resistor across the source makes both well posed.
    common::circuit(&format!(
        "{coil}[part.r_shunt]\nkind = \"resistor\"\npins = [\"a\", \"gnd\"]\nresistance = \"100k\"\n"
    ));
}
