//! The schema of every part kind: its fields, their quantities and limits, and which parameter sets it may use.

use super::*;

/// A value rule checked after reading.
#[derive(Clone, Copy, PartialEq)]
pub(super) enum Rule {
    Any,
    Positive,
    NonNegative,
    /// Strictly between 0 and 1.
    Fraction,
}

/// One parameter a part family accepts.
pub(super) struct Field {
    pub(super) name: &'static str,
    pub(super) quantity: Quantity,
    pub(super) rule: Rule,
    /// `None`: optional with no default; see `required`.
    pub(super) default: Option<f64>,
    pub(super) required: bool,
}

pub(super) const fn field(name: &'static str, quantity: Quantity, rule: Rule) -> Field {
    Field {
        name,
        quantity,
        rule,
        default: None,
        required: true,
    }
}

pub(super) const fn optional(name: &'static str, quantity: Quantity, rule: Rule) -> Field {
    Field {
        name,
        quantity,
        rule,
        default: None,
        required: false,
    }
}

pub(super) const fn with_default(
    name: &'static str,
    quantity: Quantity,
    rule: Rule,
    value: f64,
) -> Field {
    Field {
        name,
        quantity,
        rule,
        default: Some(value),
        required: false,
    }
}

pub(super) const RESISTOR_FIELDS: &[Field] =
    &[field("resistance", Quantity::Resistance, Rule::Positive)];

pub(super) const CAPACITOR_FIELDS: &[Field] = &[
    field("capacitance", Quantity::Capacitance, Rule::Positive),
    optional("initial_voltage", Quantity::Voltage, Rule::Any),
];

pub(super) const INDUCTOR_FIELDS: &[Field] = &[
    field("inductance", Quantity::Inductance, Rule::Positive),
    with_default(
        "series_resistance",
        Quantity::Resistance,
        Rule::NonNegative,
        0.0,
    ),
    optional("initial_current", Quantity::Current, Rule::Any),
];

pub(super) const TRANSFORMER_FIELDS: &[Field] = &[
    field("primary_inductance", Quantity::Inductance, Rule::Positive),
    with_default(
        "primary_resistance",
        Quantity::Resistance,
        Rule::NonNegative,
        0.0,
    ),
    field("secondary_inductance", Quantity::Inductance, Rule::Positive),
    with_default(
        "secondary_resistance",
        Quantity::Resistance,
        Rule::NonNegative,
        0.0,
    ),
    field("coupling", Quantity::Ratio, Rule::Fraction),
];

pub(super) const DIODE_FIELDS: &[Field] = &[
    with_default(
        "saturation_current",
        Quantity::Current,
        Rule::Positive,
        1e-14,
    ),
    with_default("emission_coefficient", Quantity::Ratio, Rule::Positive, 1.0),
    with_default(
        "series_resistance",
        Quantity::Resistance,
        Rule::NonNegative,
        0.0,
    ),
    optional("breakdown_voltage", Quantity::Voltage, Rule::Positive),
    with_default("breakdown_current", Quantity::Current, Rule::Positive, 1e-3),
    optional("breakdown_resistance", Quantity::Resistance, Rule::Positive),
];

pub(super) const LED_FIELDS: &[Field] = &[
    field("forward_voltage", Quantity::Voltage, Rule::Positive),
    with_default("forward_current", Quantity::Current, Rule::Positive, 20e-3),
    with_default("emission_coefficient", Quantity::Ratio, Rule::Positive, 2.0),
    with_default(
        "series_resistance",
        Quantity::Resistance,
        Rule::NonNegative,
        0.0,
    ),
    optional("breakdown_voltage", Quantity::Voltage, Rule::Positive),
];

pub(super) const SWITCH_FIELDS: &[Field] = &[
    field("on_voltage", Quantity::Voltage, Rule::Any),
    field("off_voltage", Quantity::Voltage, Rule::Any),
    with_default("on_resistance", Quantity::Resistance, Rule::Positive, 1.0),
    with_default("off_resistance", Quantity::Resistance, Rule::Positive, 1e9),
];

pub(super) const COMPARATOR_FIELDS: &[Field] = &[
    with_default("low_headroom", Quantity::Voltage, Rule::NonNegative, 0.05),
    with_default("high_headroom", Quantity::Voltage, Rule::NonNegative, 1.5),
    with_default("gain", Quantity::Ratio, Rule::Positive, 1e5),
    with_default(
        "output_resistance",
        Quantity::Resistance,
        Rule::Positive,
        100.0,
    ),
    with_default("response_time", Quantity::Time, Rule::Positive, 1e-6),
    with_default("input_offset", Quantity::Voltage, Rule::Any, 0.0),
    with_default("hysteresis", Quantity::Voltage, Rule::NonNegative, 0.0),
];

pub(super) const MOSFET_FIELDS: &[Field] = &[
    field("threshold_voltage", Quantity::Voltage, Rule::Positive),
    field(
        "transconductance",
        Quantity::Transconductance,
        Rule::Positive,
    ),
    with_default(
        "channel_length_modulation",
        Quantity::Ratio,
        Rule::NonNegative,
        0.0,
    ),
    with_default("body_diode", Quantity::Flag, Rule::Any, 1.0),
    with_default(
        "body_diode_saturation_current",
        Quantity::Current,
        Rule::Positive,
        1e-12,
    ),
    with_default(
        "body_diode_emission_coefficient",
        Quantity::Ratio,
        Rule::Positive,
        1.0,
    ),
];

pub(super) const BIPOLAR_FIELDS: &[Field] = &[
    with_default(
        "saturation_current",
        Quantity::Current,
        Rule::Positive,
        1e-14,
    ),
    with_default("forward_beta", Quantity::Ratio, Rule::Positive, 100.0),
    with_default("reverse_beta", Quantity::Ratio, Rule::Positive, 1.0),
];

pub(super) const REGULATOR_FIELDS: &[Field] = &[
    field("output_voltage", Quantity::Voltage, Rule::Positive),
    field("dropout_voltage", Quantity::Voltage, Rule::NonNegative),
    with_default(
        "quiescent_current",
        Quantity::Current,
        Rule::NonNegative,
        0.0,
    ),
    with_default("current_limit", Quantity::Current, Rule::Positive, 1.0),
    with_default(
        "output_resistance",
        Quantity::Resistance,
        Rule::Positive,
        0.05,
    ),
];

pub(super) const RELAY_FIELDS: &[Field] = &[
    field("coil_resistance", Quantity::Resistance, Rule::Positive),
    field("coil_inductance", Quantity::Inductance, Rule::Positive),
    field("pickup_current", Quantity::Current, Rule::Positive),
    field("dropout_current", Quantity::Current, Rule::Positive),
    with_default("close_travel", Quantity::Time, Rule::NonNegative, 0.0),
    with_default("open_travel", Quantity::Time, Rule::NonNegative, 0.0),
    with_default("bounce_count", Quantity::Count, Rule::NonNegative, 0.0),
    with_default("bounce_time", Quantity::Time, Rule::NonNegative, 0.0),
    with_default(
        "contact_resistance",
        Quantity::Resistance,
        Rule::Positive,
        0.05,
    ),
    with_default("open_resistance", Quantity::Resistance, Rule::Positive, 1e9),
];

pub(super) const TIMER_FIELDS: &[Field] = &[
    with_default("high_headroom", Quantity::Voltage, Rule::NonNegative, 1.7),
    with_default("low_headroom", Quantity::Voltage, Rule::NonNegative, 0.1),
    with_default(
        "output_resistance",
        Quantity::Resistance,
        Rule::Positive,
        10.0,
    ),
    with_default(
        "discharge_resistance",
        Quantity::Resistance,
        Rule::Positive,
        10.0,
    ),
    with_default("reset_voltage", Quantity::Voltage, Rule::Positive, 0.7),
    with_default("supply_current", Quantity::Current, Rule::NonNegative, 0.0),
];

pub(super) const SINE_FIELDS: &[Field] = &[
    optional("amplitude", Quantity::Ratio, Rule::Any),
    optional("rms", Quantity::Ratio, Rule::Any),
    field("frequency", Quantity::Frequency, Rule::Positive),
    with_default("phase", Quantity::Angle, Rule::Any, 0.0),
    with_default("offset", Quantity::Ratio, Rule::Any, 0.0),
];

pub(super) const STEP_FIELDS: &[Field] = &[
    field("before", Quantity::Ratio, Rule::Any),
    field("after", Quantity::Ratio, Rule::Any),
    field("at", Quantity::Time, Rule::NonNegative),
];

/// The parameter fields of a part kind (sources have waveform tables instead).
pub(super) fn fields_of(kind: &str) -> &'static [Field] {
    match kind {
        "resistor" => RESISTOR_FIELDS,
        "capacitor" => CAPACITOR_FIELDS,
        "inductor" => INDUCTOR_FIELDS,
        "transformer" => TRANSFORMER_FIELDS,
        "diode" | "bridge" => DIODE_FIELDS,
        "led" => LED_FIELDS,
        "switch" => SWITCH_FIELDS,
        "comparator" => COMPARATOR_FIELDS,
        "nmos" | "pmos" => MOSFET_FIELDS,
        "npn" | "pnp" => BIPOLAR_FIELDS,
        "regulator" => REGULATOR_FIELDS,
        "relay" => RELAY_FIELDS,
        "timer" => TIMER_FIELDS,
        _ => &[],
    }
}

/// The parameter-set family a part kind draws on, if it may use one.
pub(super) fn family_of(kind: &str) -> Option<&'static str> {
    match kind {
        "diode" | "bridge" => Some("diode"),
        "led" => Some("led"),
        "switch" => Some("switch"),
        "comparator" | "nmos" | "pmos" | "npn" | "pnp" | "regulator" | "relay" | "timer" => {
            PART_KINDS.iter().find(|k| **k == kind).copied()
        }
        _ => None,
    }
}

pub(super) const PART_KINDS: &[&str] = &[
    "resistor",
    "capacitor",
    "inductor",
    "transformer",
    "voltage-source",
    "current-source",
    "diode",
    "led",
    "bridge",
    "switch",
    "comparator",
    "nmos",
    "pmos",
    "npn",
    "pnp",
    "regulator",
    "relay",
    "timer",
];

pub(super) const SET_FAMILIES: &[&str] = &[
    "diode",
    "led",
    "switch",
    "comparator",
    "nmos",
    "pmos",
    "npn",
    "pnp",
    "regulator",
    "relay",
    "timer",
];
