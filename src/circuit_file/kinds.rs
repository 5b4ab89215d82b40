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

/// Which of the reader's builders makes a kind's model specification from its values.
#[derive(Clone, Copy)]
pub(super) enum Build {
    /// `Reader::passive_spec`: resistors, capacitors, inductors, transformers, sources.
    Passive,
    /// `Reader::semiconductor_spec`: diodes, bridges, LEDs, MOSFETs, bipolar transistors.
    Semiconductor,
    /// `Reader::control_spec`: switches, comparators, regulators, relays, timers.
    Control,
}

/// Everything the file format knows about one part kind, in one place: its name, its pins in
/// order, its parameter fields (sources have waveform tables instead), the parameter-set
/// family it may draw on, and how its model specification is built.
pub(super) struct Kind {
    pub(super) name: &'static str,
    pub(super) pins: &'static [&'static str],
    pub(super) fields: &'static [Field],
    pub(super) set_family: Option<&'static str>,
    pub(super) build: Build,
}

/// Every part kind, in the order the messages list them.
pub(super) const KINDS: &[Kind] = &[
    Kind {
        name: "resistor",
        pins: &["a", "b"],
        fields: RESISTOR_FIELDS,
        set_family: None,
        build: Build::Passive,
    },
    Kind {
        name: "capacitor",
        pins: &["a", "b"],
        fields: CAPACITOR_FIELDS,
        set_family: None,
        build: Build::Passive,
    },
    Kind {
        name: "inductor",
        pins: &["a", "b"],
        fields: INDUCTOR_FIELDS,
        set_family: None,
        build: Build::Passive,
    },
    Kind {
        name: "transformer",
        pins: &["primary_a", "primary_b", "secondary_a", "secondary_b"],
        fields: TRANSFORMER_FIELDS,
        set_family: None,
        build: Build::Passive,
    },
    Kind {
        name: "voltage-source",
        pins: &["plus", "minus"],
        fields: &[],
        set_family: None,
        build: Build::Passive,
    },
    Kind {
        name: "current-source",
        pins: &["from", "to"],
        fields: &[],
        set_family: None,
        build: Build::Passive,
    },
    Kind {
        name: "diode",
        pins: &["anode", "cathode"],
        fields: DIODE_FIELDS,
        set_family: Some("diode"),
        build: Build::Semiconductor,
    },
    Kind {
        name: "led",
        pins: &["anode", "cathode"],
        fields: LED_FIELDS,
        set_family: Some("led"),
        build: Build::Semiconductor,
    },
    Kind {
        name: "bridge",
        pins: &["ac_a", "ac_b", "dc_plus", "dc_minus"],
        fields: DIODE_FIELDS,
        set_family: Some("diode"),
        build: Build::Semiconductor,
    },
    Kind {
        name: "switch",
        pins: &["a", "b", "control_plus", "control_minus"],
        fields: SWITCH_FIELDS,
        set_family: Some("switch"),
        build: Build::Control,
    },
    Kind {
        name: "comparator",
        pins: &["plus", "minus", "output", "supply_plus", "supply_minus"],
        fields: COMPARATOR_FIELDS,
        set_family: Some("comparator"),
        build: Build::Control,
    },
    Kind {
        name: "nmos",
        pins: &["drain", "gate", "source"],
        fields: MOSFET_FIELDS,
        set_family: Some("nmos"),
        build: Build::Semiconductor,
    },
    Kind {
        name: "pmos",
        pins: &["drain", "gate", "source"],
        fields: MOSFET_FIELDS,
        set_family: Some("pmos"),
        build: Build::Semiconductor,
    },
    Kind {
        name: "npn",
        pins: &["collector", "base", "emitter"],
        fields: BIPOLAR_FIELDS,
        set_family: Some("npn"),
        build: Build::Semiconductor,
    },
    Kind {
        name: "pnp",
        pins: &["collector", "base", "emitter"],
        fields: BIPOLAR_FIELDS,
        set_family: Some("pnp"),
        build: Build::Semiconductor,
    },
    Kind {
        name: "regulator",
        pins: &["input", "output", "common"],
        fields: REGULATOR_FIELDS,
        set_family: Some("regulator"),
        build: Build::Control,
    },
    Kind {
        name: "relay",
        pins: &[
            "coil_a",
            "coil_b",
            "common",
            "normally_open",
            "normally_closed",
        ],
        fields: RELAY_FIELDS,
        set_family: Some("relay"),
        build: Build::Control,
    },
    Kind {
        name: "timer",
        pins: &[
            "supply_plus",
            "supply_minus",
            "trigger",
            "threshold",
            "reset",
            "output",
            "discharge",
        ],
        fields: TIMER_FIELDS,
        set_family: Some("timer"),
        build: Build::Control,
    },
];

/// The part kind of this name.
pub(super) fn kind_named(name: &str) -> Option<&'static Kind> {
    KINDS.iter().find(|k| k.name == name)
}

/// The names of every part kind, for messages.
pub(super) fn kind_names() -> Vec<&'static str> {
    KINDS.iter().map(|k| k.name).collect()
}

/// The parameter-set families, in the order of the kinds that use them.
pub(super) fn set_families() -> Vec<&'static str> {
    let mut families: Vec<&'static str> = Vec::new();
    for family in KINDS.iter().filter_map(|k| k.set_family) {
        if !families.contains(&family) {
            families.push(family);
        }
    }
    families
}

/// The parameter fields of a part kind or parameter-set family (a family has the fields of
/// the kind of its name); none for an unknown name.
pub(super) fn fields_of(name: &str) -> &'static [Field] {
    kind_named(name).map_or(&[], |k| k.fields)
}

/// The parameter-set family a part kind draws on, if it may use one.
pub(super) fn family_of(kind: &str) -> Option<&'static str> {
    kind_named(kind).and_then(|k| k.set_family)
}

/// The pin names of a part kind, in order (empty for an unknown kind).
pub fn pin_names(kind: &str) -> &'static [&'static str] {
    kind_named(kind).map_or(&[], |k| k.pins)
}
