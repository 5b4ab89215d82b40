//! `sagtrip check`: validate a circuit file and list what it holds.

use super::*;

pub(crate) fn part_summary(spec: &PartSpec) -> String {
    use Quantity::{Capacitance, Current, Inductance, Resistance, Time, Transconductance, Voltage};
    let e = |v: f64, q: Quantity| Engineering(v, q).to_string();
    match spec {
        PartSpec::Resistor { resistance } => e(*resistance, Resistance),
        PartSpec::Capacitor { capacitance, .. } => e(*capacitance, Capacitance),
        PartSpec::Inductor {
            inductance,
            series_resistance,
            ..
        } => format!(
            "{}, {}",
            e(*inductance, Inductance),
            e(*series_resistance, Resistance)
        ),
        PartSpec::Transformer(t) => format!(
            "{} / {}, k = {}",
            e(t.primary_inductance, Inductance),
            e(t.secondary_inductance, Inductance),
            t.coupling
        ),
        PartSpec::VoltageSource(w) | PartSpec::CurrentSource(w) => w.to_string(),
        PartSpec::Diode(d) | PartSpec::Bridge(d) => format!(
            "Is = {}, n = {}{}",
            e(d.saturation_current, Current),
            d.emission_coefficient,
            d.breakdown
                .as_ref()
                .map(|b| format!(", breakdown {}", e(b.voltage, Voltage)))
                .unwrap_or_default()
        ),
        PartSpec::Switch(s) => format!(
            "on above {}, off below {}",
            e(s.on_voltage, Voltage),
            e(s.off_voltage, Voltage)
        ),
        PartSpec::Comparator(c) => format!(
            "gain {:e}, lag {}, hysteresis {}",
            c.gain,
            e(c.response_time, Time),
            e(c.hysteresis, Voltage)
        ),
        PartSpec::Mosfet(m) => format!(
            "Vth {}, K {}{}",
            e(m.threshold_voltage, Voltage),
            e(m.transconductance, Transconductance),
            if m.body_diode.is_some() {
                ", body diode"
            } else {
                ""
            }
        ),
        PartSpec::Bipolar(b) => format!(
            "Is {}, beta F {}, beta R {}",
            e(b.saturation_current, Current),
            b.forward_beta,
            b.reverse_beta
        ),
        PartSpec::Regulator(r) => format!(
            "{} out, dropout {}, limit {}",
            e(r.output_voltage, Voltage),
            e(r.dropout_voltage, Voltage),
            e(r.current_limit, Current)
        ),
        PartSpec::Relay(r) => format!(
            "coil {} / {}, pick-up {}, drop-out {}",
            e(r.coil_resistance, Resistance),
            e(r.coil_inductance, Inductance),
            e(r.pickup_current, Current),
            e(r.dropout_current, Current)
        ),
        PartSpec::Timer(_) => "1/3 and 2/3 supply thresholds".to_string(),
    }
}

pub(crate) fn check(args: &CircuitArgs) -> Outcome {
    let mut out = String::new();
    let (circuit, name) = args.load()?;
    say!(out, "{name}: valid");
    if !circuit.title.is_empty() {
        say!(out, "title: {}", circuit.title);
    }
    say!(out, "\nparts ({}):", circuit.parts.len());
    for part in &circuit.parts {
        let pins: Vec<String> = sagtrip::circuit_file::pin_names(part.spec.kind_name())
            .iter()
            .zip(&part.pins)
            .filter(|(pin, _)| {
                !matches!(&part.spec, PartSpec::Relay(r) if **pin == "normally_closed" && !r.normally_closed_connected)
            })
            .map(|(pin, &node)| format!("{pin}={}", circuit.nodes[node]))
            .collect();
        say!(
            out,
            "  {:<14} {:<15} {:<40} {}",
            part.name,
            part.spec.kind_name(),
            pins.join(" "),
            part_summary(&part.spec)
        );
    }
    say!(
        out,
        "\nnodes ({}, gnd is the reference):",
        circuit.nodes.len()
    );
    for (i, node) in circuit.nodes.iter().enumerate() {
        let users: Vec<&str> = circuit
            .parts
            .iter()
            .filter(|p| {
                p.pins.iter().enumerate().any(|(k, &n)| {
                    n == i && !matches!(&p.spec, PartSpec::Relay(r) if k == 4 && !r.normally_closed_connected)
                })
            })
            .map(|p| p.name.as_str())
            .collect();
        say!(out, "  {:<14} {}", node, users.join(", "));
    }
    say!(out, "\nparameter sets ({}):", circuit.parameter_sets.len());
    for set in &circuit.parameter_sets {
        let values: Vec<String> = set
            .values
            .iter()
            .map(|(k, v)| format!("{k} = {v}"))
            .collect();
        say!(
            out,
            "  {:<14} {:<8} {}; used by: {}",
            set.name,
            set.family,
            values.join(", "),
            if set.used_by.is_empty() {
                "(none)".to_string()
            } else {
                set.used_by.join(", ")
            }
        );
    }
    if !circuit.tolerances.is_empty() {
        say!(
            out,
            "\nvalues with a tolerance ({}):",
            circuit.tolerances.len()
        );
        for t in &circuit.tolerances {
            say!(
                out,
                "  {:<44} {} (from {} to {}), line {}",
                t.field,
                significant(t.nominal),
                significant(t.min),
                significant(t.max),
                t.line
            );
        }
    }
    Ok(out)
}
