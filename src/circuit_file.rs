//! The circuit file format: TOML read into a validated [`Circuit`].
//!
//! The file is read into TOML's spanned tree and walked by hand, so that every problem is
//! reported at once with its line, column and field, and the domain types stay free of
//! file concerns. The format is specified in `docs/circuit-format.md`.

use std::collections::HashMap;
use std::fmt;
use std::ops::Range;

use toml::de::{DeTable, DeValue};
use toml::Spanned;

use crate::circuit::{
    pin_names_of, BipolarParams, Breakdown, Circuit, ComparatorParams, DiodeParams, MosfetParams,
    NodeId, ParameterSetInfo, Part, PartSpec, RegulatorParams, RelayParams, SwitchParams,
    TimerParams, Tolerance, TransformerParams, GROUND, THERMAL_VOLTAGE,
};
use crate::units::{parse_value, Quantity};
use crate::waveform::Waveform;

/// One problem found in a circuit file.
#[derive(Clone, Debug, PartialEq)]
pub struct FileProblem {
    /// 1-based line.
    pub line: usize,
    /// 1-based column (in characters).
    pub column: usize,
    /// Dotted path of the offending field, e.g. `part.r_top.resistance`.
    pub field: String,
    /// What is wrong.
    pub message: String,
    /// The source line, for display.
    pub source_line: String,
    /// Length of the marked text on that line, in characters (at least 1).
    pub marker_len: usize,
}

/// Every problem found in one circuit file.
#[derive(Clone, Debug, PartialEq, thiserror::Error)]
pub struct CircuitFileError {
    /// The file's path as given.
    pub path: String,
    /// Problems in file order.
    pub problems: Vec<FileProblem>,
}

impl fmt::Display for CircuitFileError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let count = self.problems.len();
        writeln!(
            f,
            "{} has {} problem{}:",
            self.path,
            count,
            if count == 1 { "" } else { "s" }
        )?;
        for p in &self.problems {
            writeln!(
                f,
                "{}:{}:{}: {}: {}",
                self.path, p.line, p.column, p.field, p.message
            )?;
            let gutter = p.line.to_string().len();
            writeln!(f, "{:gutter$} |", "")?;
            writeln!(f, "{} | {}", p.line, p.source_line)?;
            writeln!(
                f,
                "{:gutter$} | {}{}",
                "",
                " ".repeat(p.column.saturating_sub(1)),
                "^".repeat(p.marker_len.max(1))
            )?;
        }
        Ok(())
    }
}

/// Reads and validates a circuit from TOML text; `path` names the file in messages.
///
/// ```
/// let text = r#"
/// title = "RC low-pass"
/// [part.supply]
/// kind = "voltage-source"
/// pins = ["in", "gnd"]
/// dc = "5V"
/// [part.r1]
/// kind = "resistor"
/// pins = ["in", "out"]
/// resistance = "1k"
/// [part.c1]
/// kind = "capacitor"
/// pins = ["out", "gnd"]
/// capacitance = "1u"
/// "#;
/// let circuit = sagtrip::circuit_file::parse_circuit(text, "rc.toml").unwrap();
/// assert_eq!(circuit.parts.len(), 3);
/// assert_eq!(circuit.nodes, ["gnd", "in", "out"]);
/// ```
pub fn parse_circuit(text: &str, path: &str) -> Result<Circuit, CircuitFileError> {
    parse_circuit_with(text, path, &HashMap::new())
}

/// As [`parse_circuit`], with some toleranced values replaced: `overrides` maps a field
/// (as in [`Tolerance::field`]) to the value to use. A field without a tolerance, or a
/// value outside its tolerance, is reported as a problem of the file.
pub fn parse_circuit_with(
    text: &str,
    path: &str,
    overrides: &HashMap<String, f64>,
) -> Result<Circuit, CircuitFileError> {
    let mut reader = Reader {
        text,
        problems: Vec::new(),
        tolerances: Vec::new(),
        overrides,
    };
    let circuit = match DeTable::parse(text) {
        Ok(doc) => reader.document(doc.get_ref()),
        Err(e) => {
            let span = e.span().unwrap_or(0..0);
            let message = e.message().trim().to_string();
            reader.problem(span, "(syntax)", message);
            None
        }
    };
    for field in overrides.keys() {
        if !reader.tolerances.iter().any(|t| &t.field == field) {
            reader.problem(0..0, field, "no value with a tolerance has this name");
        }
    }
    match circuit {
        Some(c) if reader.problems.is_empty() => Ok(c),
        _ => {
            let mut problems = reader.problems;
            problems.sort_by_key(|p| (p.line, p.column));
            Err(CircuitFileError {
                path: path.to_string(),
                problems,
            })
        }
    }
}

/// A value rule checked after reading.
#[derive(Clone, Copy, PartialEq)]
enum Rule {
    Any,
    Positive,
    NonNegative,
    /// Strictly between 0 and 1.
    Fraction,
}

/// One parameter a part family accepts.
struct Field {
    name: &'static str,
    quantity: Quantity,
    rule: Rule,
    /// `None`: optional with no default; see `required`.
    default: Option<f64>,
    required: bool,
}

const fn field(name: &'static str, quantity: Quantity, rule: Rule) -> Field {
    Field {
        name,
        quantity,
        rule,
        default: None,
        required: true,
    }
}

const fn optional(name: &'static str, quantity: Quantity, rule: Rule) -> Field {
    Field {
        name,
        quantity,
        rule,
        default: None,
        required: false,
    }
}

const fn with_default(name: &'static str, quantity: Quantity, rule: Rule, value: f64) -> Field {
    Field {
        name,
        quantity,
        rule,
        default: Some(value),
        required: false,
    }
}

const RESISTOR_FIELDS: &[Field] = &[field("resistance", Quantity::Resistance, Rule::Positive)];
const CAPACITOR_FIELDS: &[Field] = &[
    field("capacitance", Quantity::Capacitance, Rule::Positive),
    optional("initial_voltage", Quantity::Voltage, Rule::Any),
];
const INDUCTOR_FIELDS: &[Field] = &[
    field("inductance", Quantity::Inductance, Rule::Positive),
    with_default(
        "series_resistance",
        Quantity::Resistance,
        Rule::NonNegative,
        0.0,
    ),
    optional("initial_current", Quantity::Current, Rule::Any),
];
const TRANSFORMER_FIELDS: &[Field] = &[
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
const DIODE_FIELDS: &[Field] = &[
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
const LED_FIELDS: &[Field] = &[
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
const SWITCH_FIELDS: &[Field] = &[
    field("on_voltage", Quantity::Voltage, Rule::Any),
    field("off_voltage", Quantity::Voltage, Rule::Any),
    with_default("on_resistance", Quantity::Resistance, Rule::Positive, 1.0),
    with_default("off_resistance", Quantity::Resistance, Rule::Positive, 1e9),
];
const COMPARATOR_FIELDS: &[Field] = &[
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
const MOSFET_FIELDS: &[Field] = &[
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
const BIPOLAR_FIELDS: &[Field] = &[
    with_default(
        "saturation_current",
        Quantity::Current,
        Rule::Positive,
        1e-14,
    ),
    with_default("forward_beta", Quantity::Ratio, Rule::Positive, 100.0),
    with_default("reverse_beta", Quantity::Ratio, Rule::Positive, 1.0),
];
const REGULATOR_FIELDS: &[Field] = &[
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
const RELAY_FIELDS: &[Field] = &[
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
const TIMER_FIELDS: &[Field] = &[
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
const SINE_FIELDS: &[Field] = &[
    optional("amplitude", Quantity::Ratio, Rule::Any),
    optional("rms", Quantity::Ratio, Rule::Any),
    field("frequency", Quantity::Frequency, Rule::Positive),
    with_default("phase", Quantity::Angle, Rule::Any, 0.0),
    with_default("offset", Quantity::Ratio, Rule::Any, 0.0),
];
const STEP_FIELDS: &[Field] = &[
    field("before", Quantity::Ratio, Rule::Any),
    field("after", Quantity::Ratio, Rule::Any),
    field("at", Quantity::Time, Rule::NonNegative),
];

/// The parameter fields of a part kind (sources have waveform tables instead).
fn fields_of(kind: &str) -> &'static [Field] {
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
fn family_of(kind: &str) -> Option<&'static str> {
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

const PART_KINDS: &[&str] = &[
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
const SET_FAMILIES: &[&str] = &[
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

/// A parameter value read from the file, with where it was written.
#[derive(Clone)]
struct Located {
    value: f64,
    span: Range<usize>,
}

struct ParameterSet {
    family: String,
    values: HashMap<String, Located>,
    order: Vec<String>,
    used_by: Vec<String>,
}

/// Where a part's pins were written, for topology messages.
struct PartOrigin {
    name_span: Range<usize>,
    pin_spans: Vec<Range<usize>>,
}

struct Reader<'t> {
    text: &'t str,
    problems: Vec<FileProblem>,
    /// Values with a tolerance, as read.
    tolerances: Vec<Tolerance>,
    /// Values to use instead of the written ones (a tolerance case), by field.
    overrides: &'t HashMap<String, f64>,
}

type Entry<'a, 'i> = (
    &'a Spanned<std::borrow::Cow<'i, str>>,
    &'a Spanned<DeValue<'i>>,
);

impl Reader<'_> {
    /// Line and column (from 1, in characters) of byte `offset`.
    fn place(&self, offset: usize) -> (usize, usize) {
        let start = offset.min(self.text.len());
        let line_start = self.text[..start].rfind('\n').map_or(0, |i| i + 1);
        let line = self.text[..start].matches('\n').count() + 1;
        (line, self.text[line_start..start].chars().count() + 1)
    }

    fn problem(&mut self, span: Range<usize>, field: &str, message: impl Into<String>) {
        let start = span.start.min(self.text.len());
        let line_start = self.text[..start].rfind('\n').map_or(0, |i| i + 1);
        let line_end = self.text[start..]
            .find('\n')
            .map_or(self.text.len(), |i| start + i);
        let (line, column) = self.place(start);
        let end = span.end.clamp(start, line_end);
        let marker_len = self.text[start..end].chars().count().max(1);
        self.problems.push(FileProblem {
            line,
            column,
            field: field.to_string(),
            message: message.into(),
            source_line: self.text[line_start..line_end].trim_end().to_string(),
            marker_len,
        });
    }

    fn document(&mut self, doc: &DeTable<'_>) -> Option<Circuit> {
        let mut title = String::new();
        let mut sets: Vec<(String, ParameterSet)> = Vec::new();
        let mut part_tables: Vec<Entry<'_, '_>> = Vec::new();
        for (key, value) in doc {
            match key.get_ref().as_ref() {
                "title" => match value.get_ref().as_str() {
                    Some(s) => title = s.to_string(),
                    None => self.problem(value.span(), "title", "must be a string"),
                },
                "parameter_set" => match value.get_ref().as_table() {
                    Some(table) => {
                        for (name, body) in table {
                            if let Some(set) = self.parameter_set(name, body) {
                                sets.push((name.get_ref().to_string(), set));
                            }
                        }
                    }
                    None => self.problem(
                        value.span(),
                        "parameter_set",
                        "must be a table of named sets: [parameter_set.NAME]",
                    ),
                },
                "part" => match value.get_ref().as_table() {
                    Some(table) => part_tables.extend(table.iter()),
                    None => self.problem(
                        value.span(),
                        "part",
                        "must be a table of named parts: [part.NAME]",
                    ),
                },
                other => self.problem(
                    key.span(),
                    other,
                    "unknown top-level field (expected title, parameter_set or part)",
                ),
            }
        }
        if part_tables.is_empty() && self.problems.is_empty() {
            self.problem(
                0..0,
                "part",
                "the circuit has no parts ([part.NAME] tables)",
            );
            return None;
        }

        let mut nodes: Vec<String> = vec![GROUND.to_string()];
        let mut parts = Vec::new();
        let mut origins = Vec::new();
        for (name, body) in part_tables {
            if let Some((part, origin)) = self.part(name, body, &mut nodes, &mut sets) {
                parts.push(part);
                origins.push(origin);
            }
        }
        if !self.problems.is_empty() {
            return None;
        }
        self.topology(&nodes, &parts, &origins);
        if !self.problems.is_empty() {
            return None;
        }
        let parameter_sets = sets
            .into_iter()
            .map(|(name, set)| ParameterSetInfo {
                name,
                family: set.family,
                values: set
                    .order
                    .iter()
                    .map(|k| (k.clone(), set.values[k].value))
                    .collect(),
                used_by: set.used_by,
            })
            .collect();
        Some(Circuit {
            title,
            nodes,
            parts,
            parameter_sets,
            tolerances: self.tolerances.clone(),
        })
    }

    /// Reads a number, or a string with SI prefix and unit; a flag from a TOML boolean.
    fn number(
        &mut self,
        value: &Spanned<DeValue<'_>>,
        path: &str,
        quantity: Quantity,
    ) -> Option<f64> {
        if quantity == Quantity::Flag {
            // A yes/no setting is a TOML boolean and nothing else.
            return match value.get_ref() {
                DeValue::Boolean(b) => Some(f64::from(u8::from(*b))),
                other => {
                    self.problem(
                        value.span(),
                        path,
                        format!(
                            "expected true or false, found {}",
                            with_article(other.type_str())
                        ),
                    );
                    None
                }
            };
        }
        if let Some(v) = self.toleranced(value, path, quantity) {
            return v;
        }
        let parsed = match value.get_ref() {
            DeValue::Integer(i) => i.as_str().replace('_', "").parse::<f64>().ok(),
            DeValue::Float(x) => x.as_str().replace('_', "").parse::<f64>().ok(),
            DeValue::String(s) => match parse_value(s, quantity) {
                Ok(v) => Some(v),
                Err(e) => {
                    self.problem(value.span(), path, e.to_string());
                    return None;
                }
            },
            other => {
                self.problem(
                    value.span(),
                    path,
                    format!(
                        "expected a number or a value like \"4.7u\", found {}",
                        with_article(other.type_str())
                    ),
                );
                return None;
            }
        };
        match parsed {
            Some(v) if v.is_finite() => Some(v),
            _ => {
                self.problem(value.span(), path, "must be a finite number");
                None
            }
        }
    }

    /// Reads a value with a tolerance: a string `"68k ±1%"` (or `+-1%`, or an absolute
    /// `±0.1V`), or a table `{ value = "68k", min = "67k", max = "69k" }`. Returns `None`
    /// when `value` carries no tolerance (the caller reads it as a plain number), else the
    /// value to use (the written one, or this case's override), after recording it.
    fn toleranced(
        &mut self,
        value: &Spanned<DeValue<'_>>,
        path: &str,
        quantity: Quantity,
    ) -> Option<Option<f64>> {
        let span = value.span();
        let (nominal, min, max) = match value.get_ref() {
            DeValue::String(s) => {
                let (left, right) = s
                    .split_once('±')
                    .or_else(|| s.split_once("+-"))
                    .or_else(|| s.split_once("+/-"))?;
                let nominal = match parse_value(left.trim(), quantity) {
                    Ok(v) => v,
                    Err(e) => {
                        self.problem(span, path, e.to_string());
                        return Some(None);
                    }
                };
                let right = right.trim();
                let spread = if let Some(p) = right.strip_suffix('%') {
                    match p.trim().parse::<f64>() {
                        Ok(p) if p.is_finite() && p >= 0.0 => nominal.abs() * p / 100.0,
                        _ => {
                            self.problem(
                                span,
                                path,
                                format!("a tolerance is e.g. ±5% or ±0.1V, found `{right}`"),
                            );
                            return Some(None);
                        }
                    }
                } else {
                    match parse_value(right, quantity) {
                        Ok(a) if a >= 0.0 => a,
                        _ => {
                            self.problem(
                                span,
                                path,
                                format!("a tolerance is e.g. ±5% or ±0.1V, found `{right}`"),
                            );
                            return Some(None);
                        }
                    }
                };
                (nominal, nominal - spread, nominal + spread)
            }
            DeValue::Table(table) => {
                let mut read = |key: &str| -> Option<Option<f64>> {
                    table
                        .get(key)
                        .map(|v| self.number(v, &format!("{path}.{key}"), quantity))
                };
                for (key, _) in table.iter() {
                    if !["value", "min", "max"].contains(&key.get_ref().as_ref()) {
                        self.problem(
                            key.span(),
                            &format!("{path}.{}", key.get_ref()),
                            "a value with limits takes `value`, `min` and `max`",
                        );
                        return Some(None);
                    }
                }
                let (Some(v), Some(lo), Some(hi)) = (read("value"), read("min"), read("max"))
                else {
                    self.problem(
                        span,
                        path,
                        "a value with limits needs all of `value`, `min` and `max`",
                    );
                    return Some(None);
                };
                let (Some(v), Some(lo), Some(hi)) = (v, lo, hi) else {
                    return Some(None);
                };
                if !(lo <= v && v <= hi) {
                    self.problem(
                        span,
                        path,
                        format!("needs min <= value <= max, got {lo} <= {v} <= {hi}"),
                    );
                    return Some(None);
                }
                (v, lo, hi)
            }
            _ => return None,
        };
        if !(min.is_finite() && max.is_finite()) {
            self.problem(span, path, "must be a finite number");
            return Some(None);
        }
        let (line, column) = self.place(span.start);
        self.tolerances.push(Tolerance {
            field: path.to_string(),
            nominal,
            min,
            max,
            line,
            column,
        });
        // Limits computed from a percentage may differ from a case's value in the last bit.
        let slack = 1e-12 * min.abs().max(max.abs());
        match self.overrides.get(path) {
            Some(&v) if (min - slack..=max + slack).contains(&v) => Some(Some(v)),
            Some(&v) => {
                self.problem(
                    span,
                    path,
                    format!("the case's value {v} lies outside the tolerance {min} .. {max}"),
                );
                Some(None)
            }
            None => Some(Some(nominal)),
        }
    }

    /// Reads the parameters of `fields` from `entries` into `out`, reporting unknown keys.
    fn parameters<'a, 'i: 'a>(
        &mut self,
        entries: impl Iterator<Item = Entry<'a, 'i>>,
        fields: &[Field],
        path: &str,
        what: &str,
        out: &mut HashMap<String, Located>,
        order: &mut Vec<String>,
    ) {
        for (key, value) in entries {
            let name = key.get_ref().as_ref();
            let field_path = format!("{path}.{name}");
            let Some(spec) = fields.iter().find(|f| f.name == name) else {
                let known: Vec<&str> = fields.iter().map(|f| f.name).collect();
                self.problem(
                    key.span(),
                    &field_path,
                    if known.is_empty() {
                        format!("unknown parameter `{name}`: {what} takes no parameters")
                    } else {
                        format!(
                            "unknown parameter `{name}` for {what} (known: {})",
                            known.join(", ")
                        )
                    },
                );
                continue;
            };
            let Some(v) = self.number(value, &field_path, spec.quantity) else {
                continue;
            };
            if spec.quantity == Quantity::Count && (v.fract() != 0.0 || v < 0.0) {
                self.problem(
                    value.span(),
                    &field_path,
                    format!("must be a whole number, got {v}"),
                );
                continue;
            }
            let rule_ok = |v: f64| match spec.rule {
                Rule::Any => true,
                Rule::Positive => v > 0.0,
                Rule::NonNegative => v >= 0.0,
                Rule::Fraction => v > 0.0 && v < 1.0,
            };
            // A tolerance's limits must obey the rule too.
            let limits = self
                .tolerances
                .last()
                .filter(|t| t.field == field_path)
                .map(|t| (t.min, t.max));
            let ok = rule_ok(v) && limits.is_none_or(|(lo, hi)| rule_ok(lo) && rule_ok(hi));
            if !ok {
                let need = match spec.rule {
                    Rule::Positive => "must be positive",
                    Rule::NonNegative => "must not be negative",
                    Rule::Fraction => "must be between 0 and 1 (exclusive)",
                    Rule::Any => "",
                };
                self.problem(value.span(), &field_path, format!("{need}, got {v}"));
                continue;
            }
            order.push(name.to_string());
            out.insert(
                name.to_string(),
                Located {
                    value: v,
                    span: value.span(),
                },
            );
        }
    }

    fn parameter_set(
        &mut self,
        name: &Spanned<std::borrow::Cow<'_, str>>,
        body: &Spanned<DeValue<'_>>,
    ) -> Option<ParameterSet> {
        let path = format!("parameter_set.{}", name.get_ref());
        let Some(table) = body.get_ref().as_table() else {
            self.problem(body.span(), &path, "must be a table");
            return None;
        };
        let family = match table.get("kind").map(|v| (v.get_ref().as_str(), v.span())) {
            Some((Some(k), span)) => {
                if !SET_FAMILIES.contains(&k) {
                    self.problem(
                        span,
                        &format!("{path}.kind"),
                        format!(
                            "unknown parameter-set kind `{k}` (known: {})",
                            SET_FAMILIES.join(", ")
                        ),
                    );
                    return None;
                }
                k.to_string()
            }
            Some((None, span)) => {
                self.problem(span, &format!("{path}.kind"), "must be a string");
                return None;
            }
            None => {
                self.problem(
                    name.span(),
                    &path,
                    format!("missing `kind` (one of {})", SET_FAMILIES.join(", ")),
                );
                return None;
            }
        };
        let mut values = HashMap::new();
        let mut order = Vec::new();
        self.parameters(
            table.iter().filter(|(k, _)| k.get_ref() != "kind"),
            fields_of(&family),
            &path,
            &format!("a {family} parameter set"),
            &mut values,
            &mut order,
        );
        Some(ParameterSet {
            family,
            values,
            order,
            used_by: Vec::new(),
        })
    }

    fn node_id(nodes: &mut Vec<String>, name: &str) -> NodeId {
        if let Some(i) = nodes.iter().position(|n| n == name) {
            i
        } else {
            nodes.push(name.to_string());
            nodes.len() - 1
        }
    }

    fn part(
        &mut self,
        name: &Spanned<std::borrow::Cow<'_, str>>,
        body: &Spanned<DeValue<'_>>,
        nodes: &mut Vec<String>,
        sets: &mut [(String, ParameterSet)],
    ) -> Option<(Part, PartOrigin)> {
        let part_name = name.get_ref().to_string();
        let path = format!("part.{part_name}");
        let Some(table) = body.get_ref().as_table() else {
            self.problem(body.span(), &path, "must be a table");
            return None;
        };
        let problems_before = self.problems.len();
        let kind = match table.get("kind") {
            Some(v) => match v.get_ref().as_str() {
                Some(k) if PART_KINDS.contains(&k) => k.to_string(),
                Some(k) => {
                    self.problem(
                        v.span(),
                        &format!("{path}.kind"),
                        format!("unknown part kind `{k}` (known: {})", PART_KINDS.join(", ")),
                    );
                    return None;
                }
                None => {
                    self.problem(v.span(), &format!("{path}.kind"), "must be a string");
                    return None;
                }
            },
            None => {
                self.problem(
                    name.span(),
                    &path,
                    format!("missing `kind` (one of {})", PART_KINDS.join(", ")),
                );
                return None;
            }
        };

        // Pins.
        let pin_names = pin_names_of(&kind).unwrap_or(&[]);
        let mut pins: Vec<Option<(NodeId, Range<usize>)>> = vec![None; pin_names.len()];
        match table.get("pins") {
            None => self.problem(
                name.span(),
                &format!("{path}.pins"),
                format!("missing `pins` ({})", pin_names.join(", ")),
            ),
            Some(v) => match v.get_ref() {
                DeValue::Array(list) => {
                    let optional_last = kind == "relay" && list.len() + 1 == pin_names.len();
                    if list.len() != pin_names.len() && !optional_last {
                        self.problem(
                            v.span(),
                            &format!("{path}.pins"),
                            format!(
                                "a {kind} has {} pins ({}), found {}",
                                pin_names.len(),
                                pin_names.join(", "),
                                list.len()
                            ),
                        );
                    } else {
                        for (i, item) in list.iter().enumerate() {
                            let pin_path = format!("{path}.pins.{}", pin_names[i]);
                            if let Some(n) = self.node_name(item, &pin_path) {
                                pins[i] = Some((Self::node_id(nodes, &n), item.span()));
                            }
                        }
                    }
                }
                DeValue::Table(named) => {
                    for (pin, item) in named {
                        let pin_path = format!("{path}.pins.{}", pin.get_ref());
                        match pin_names.iter().position(|p| p == pin.get_ref()) {
                            Some(i) => {
                                if let Some(n) = self.node_name(item, &pin_path) {
                                    pins[i] = Some((Self::node_id(nodes, &n), item.span()));
                                }
                            }
                            None => self.problem(
                                pin.span(),
                                &pin_path,
                                format!(
                                    "extra pin `{}`: a {kind} has pins {}",
                                    pin.get_ref(),
                                    pin_names.join(", ")
                                ),
                            ),
                        }
                    }
                    let missing: Vec<&str> = pin_names
                        .iter()
                        .zip(&pins)
                        .filter(|(n, p)| {
                            p.is_none() && !(kind == "relay" && **n == "normally_closed")
                        })
                        .map(|(n, _)| *n)
                        .collect();
                    if !missing.is_empty() && self.problems.len() == problems_before {
                        self.problem(
                            v.span(),
                            &format!("{path}.pins"),
                            format!(
                                "missing pin{} {}",
                                if missing.len() > 1 { "s" } else { "" },
                                missing.join(", ")
                            ),
                        );
                    }
                }
                _ => self.problem(
                    v.span(),
                    &format!("{path}.pins"),
                    format!(
                        "must be a list of node names [{}] or a table {{ {} = \"node\", ... }}",
                        pin_names.join(", "),
                        pin_names.first().unwrap_or(&"pin")
                    ),
                ),
            },
        }

        // Parameter set.
        let mut values: HashMap<String, Located> = HashMap::new();
        let mut order = Vec::new();
        if let Some(v) = table.get("uses") {
            let family = family_of(&kind);
            match (v.get_ref().as_str(), family) {
                (Some(set_name), Some(family)) => {
                    match sets.iter_mut().find(|(n, _)| n == set_name) {
                        Some((_, set)) if set.family == family => {
                            set.used_by.push(part_name.clone());
                            values.extend(set.values.iter().map(|(k, l)| (k.clone(), l.clone())));
                        }
                        Some((_, set)) => {
                            let set_family = set.family.clone();
                            self.problem(
                                v.span(),
                                &format!("{path}.uses"),
                                format!(
                                    "parameter set `{set_name}` is for a {set_family}, but this part is a {kind} (needs a {family} set)"
                                ),
                            );
                        }
                        None => {
                            let known: Vec<&str> = sets
                                .iter()
                                .filter(|(_, s)| s.family == family)
                                .map(|(n, _)| n.as_str())
                                .collect();
                            self.problem(
                                v.span(),
                                &format!("{path}.uses"),
                                format!(
                                    "unknown parameter set `{set_name}`{}",
                                    if known.is_empty() {
                                        format!(" (no {family} sets are declared)")
                                    } else {
                                        format!(" (known {family} sets: {})", known.join(", "))
                                    }
                                ),
                            );
                        }
                    }
                }
                (None, _) => self.problem(
                    v.span(),
                    &format!("{path}.uses"),
                    "must be the name of a parameter set",
                ),
                (_, None) => self.problem(
                    v.span(),
                    &format!("{path}.uses"),
                    format!("a {kind} cannot use a parameter set"),
                ),
            }
        }

        // Parameters written on the part override the set's.
        let is_source = kind == "voltage-source" || kind == "current-source";
        let reserved = ["kind", "pins", "uses"];
        let waveform_keys = ["dc", "sine", "step"];
        self.parameters(
            table.iter().filter(|(k, _)| {
                let k = k.get_ref().as_ref();
                !(reserved.contains(&k) || is_source && waveform_keys.contains(&k))
            }),
            fields_of(&kind),
            &path,
            &format!("a {kind}"),
            &mut values,
            &mut order,
        );

        let waveform = if is_source {
            self.waveform(table, name.span(), &path, &kind)
        } else {
            None
        };

        if self.problems.len() > problems_before {
            return None;
        }
        // A relay's normally-closed contact may be left unconnected.
        let normally_closed_absent = kind == "relay" && pins[4].is_none();
        if normally_closed_absent {
            pins[4] = Some((0, 0..0));
        }
        let mut spec = self.spec(&kind, &values, waveform, name.span(), &path)?;
        if let PartSpec::Relay(r) = &mut spec {
            r.normally_closed_connected = !normally_closed_absent;
        }
        let origin = PartOrigin {
            name_span: name.span(),
            pin_spans: pins
                .iter()
                .map(|p| p.as_ref().map_or(0..0, |p| p.1.clone()))
                .collect(),
        };
        Some((
            Part {
                name: part_name,
                pins: pins.into_iter().map(|p| p.map_or(0, |p| p.0)).collect(),
                spec,
            },
            origin,
        ))
    }

    fn node_name(&mut self, item: &Spanned<DeValue<'_>>, path: &str) -> Option<String> {
        match item.get_ref().as_str() {
            Some(s) if !s.trim().is_empty() && !s.chars().any(char::is_whitespace) => {
                Some(s.to_string())
            }
            Some(_) => {
                self.problem(
                    item.span(),
                    path,
                    "a node name must be non-empty and contain no spaces",
                );
                None
            }
            None => {
                self.problem(item.span(), path, "a node name must be a string");
                None
            }
        }
    }

    fn waveform(
        &mut self,
        table: &DeTable<'_>,
        name_span: Range<usize>,
        path: &str,
        kind: &str,
    ) -> Option<Waveform> {
        let unit = if kind == "voltage-source" {
            Quantity::Voltage
        } else {
            Quantity::Current
        };
        let present: Vec<Entry<'_, '_>> = table
            .iter()
            .filter(|(k, _)| ["dc", "sine", "step"].contains(&k.get_ref().as_ref()))
            .collect();
        if present.len() != 1 {
            let span = present.get(1).map_or(name_span, |(k, _)| k.span());
            self.problem(
                span,
                path,
                "a source needs exactly one waveform: dc = VALUE, sine = { ... } or step = { ... }",
            );
            return None;
        }
        let (key, value) = present[0];
        let wpath = format!("{path}.{}", key.get_ref());
        match key.get_ref().as_ref() {
            "dc" => self.number(value, &wpath, unit).map(Waveform::Constant),
            shape => {
                let Some(body) = value.get_ref().as_table() else {
                    self.problem(
                        value.span(),
                        &wpath,
                        format!("must be a table {{ ... }} of {shape} settings"),
                    );
                    return None;
                };
                let fields = if shape == "sine" {
                    SINE_FIELDS
                } else {
                    STEP_FIELDS
                };
                let mut v = HashMap::new();
                let mut order = Vec::new();
                let before = self.problems.len();
                // Amplitude-like fields carry the source's unit.
                for (k, item) in body {
                    let name = k.get_ref().as_ref();
                    if ["amplitude", "rms", "offset", "before", "after"].contains(&name) {
                        if let Some(x) = self.number(item, &format!("{wpath}.{name}"), unit) {
                            v.insert(
                                name.to_string(),
                                Located {
                                    value: x,
                                    span: item.span(),
                                },
                            );
                        }
                    }
                }
                self.parameters(
                    body.iter().filter(|(k, _)| {
                        !["amplitude", "rms", "offset", "before", "after"]
                            .contains(&k.get_ref().as_ref())
                    }),
                    fields,
                    &wpath,
                    &format!("a {shape} waveform"),
                    &mut v,
                    &mut order,
                );
                for f in fields {
                    if f.required && !v.contains_key(f.name) {
                        self.problem(value.span(), &wpath, format!("missing `{}`", f.name));
                    }
                }
                if self.problems.len() > before {
                    return None;
                }
                let get = |n: &str, d: f64| v.get(n).map_or(d, |l| l.value);
                if shape == "sine" {
                    let amplitude = match (v.get("amplitude"), v.get("rms")) {
                        (Some(a), None) => a.value,
                        (None, Some(r)) => r.value * std::f64::consts::SQRT_2,
                        _ => {
                            self.problem(
                                value.span(),
                                &wpath,
                                "give exactly one of `amplitude` (peak) or `rms`",
                            );
                            return None;
                        }
                    };
                    Some(Waveform::Sine {
                        amplitude,
                        frequency_hz: get("frequency", 0.0),
                        phase_deg: get("phase", 0.0),
                        offset: get("offset", 0.0),
                    })
                } else {
                    Some(Waveform::Step {
                        before: get("before", 0.0),
                        after: get("after", 0.0),
                        at_s: get("at", 0.0),
                    })
                }
            }
        }
    }

    /// Builds the typed part from its collected values, filling defaults.
    fn spec(
        &mut self,
        kind: &str,
        values: &HashMap<String, Located>,
        waveform: Option<Waveform>,
        name_span: Range<usize>,
        path: &str,
    ) -> Option<PartSpec> {
        let fields = fields_of(kind);
        let mut missing = Vec::new();
        for f in fields {
            if f.required && !values.contains_key(f.name) {
                missing.push(f.name);
            }
        }
        if !missing.is_empty() {
            self.problem(
                name_span,
                path,
                format!(
                    "missing parameter{} {} for a {kind}",
                    if missing.len() > 1 { "s" } else { "" },
                    missing.join(", ")
                ),
            );
            return None;
        }
        let get = |n: &str| -> f64 {
            values.get(n).map(|l| l.value).unwrap_or_else(|| {
                fields
                    .iter()
                    .find(|f| f.name == n)
                    .and_then(|f| f.default)
                    .unwrap_or(0.0)
            })
        };
        let opt = |n: &str| values.get(n).map(|l| l.value);
        Some(match kind {
            "resistor" => PartSpec::Resistor {
                resistance: get("resistance"),
            },
            "capacitor" => PartSpec::Capacitor {
                capacitance: get("capacitance"),
                initial_voltage: opt("initial_voltage"),
            },
            "inductor" => PartSpec::Inductor {
                inductance: get("inductance"),
                series_resistance: get("series_resistance"),
                initial_current: opt("initial_current"),
            },
            "transformer" => PartSpec::Transformer(TransformerParams {
                primary_inductance: get("primary_inductance"),
                primary_resistance: get("primary_resistance"),
                secondary_inductance: get("secondary_inductance"),
                secondary_resistance: get("secondary_resistance"),
                coupling: get("coupling"),
            }),
            "voltage-source" => PartSpec::VoltageSource(waveform?),
            "current-source" => PartSpec::CurrentSource(waveform?),
            "diode" | "bridge" => {
                let breakdown = opt("breakdown_voltage").map(|voltage| {
                    let current = get("breakdown_current");
                    Breakdown {
                        voltage,
                        current,
                        slope_resistance: opt("breakdown_resistance")
                            .unwrap_or(THERMAL_VOLTAGE / current),
                    }
                });
                let params = DiodeParams {
                    saturation_current: get("saturation_current"),
                    emission_coefficient: get("emission_coefficient"),
                    series_resistance: get("series_resistance"),
                    breakdown,
                };
                if kind == "diode" {
                    PartSpec::Diode(params)
                } else {
                    PartSpec::Bridge(params)
                }
            }
            "led" => {
                // Choose Is so that the junction drops forward_voltage at forward_current.
                let n = get("emission_coefficient");
                let vf = get("forward_voltage") - get("forward_current") * get("series_resistance");
                if vf <= 0.0 {
                    self.problem(
                        values
                            .get("forward_voltage")
                            .map_or(name_span, |l| l.span.clone()),
                        &format!("{path}.forward_voltage"),
                        "must exceed forward_current x series_resistance",
                    );
                    return None;
                }
                let saturation_current =
                    get("forward_current") / ((vf / (n * THERMAL_VOLTAGE)).exp() - 1.0);
                PartSpec::Diode(DiodeParams {
                    saturation_current,
                    emission_coefficient: n,
                    series_resistance: get("series_resistance"),
                    breakdown: opt("breakdown_voltage").map(|voltage| Breakdown {
                        voltage,
                        current: 1e-3,
                        slope_resistance: THERMAL_VOLTAGE / 1e-3,
                    }),
                })
            }
            "switch" => {
                let (on, off) = (get("on_voltage"), get("off_voltage"));
                if off > on {
                    self.problem(
                        values.get("off_voltage").map_or(name_span, |l| l.span.clone()),
                        &format!("{path}.off_voltage"),
                        format!("must not exceed on_voltage ({on} V): the switch needs on_voltage >= off_voltage"),
                    );
                    return None;
                }
                PartSpec::Switch(SwitchParams {
                    on_voltage: on,
                    off_voltage: off,
                    on_resistance: get("on_resistance"),
                    off_resistance: get("off_resistance"),
                })
            }
            "comparator" => PartSpec::Comparator(ComparatorParams {
                low_headroom: get("low_headroom"),
                high_headroom: get("high_headroom"),
                gain: get("gain"),
                output_resistance: get("output_resistance"),
                response_time: get("response_time"),
                input_offset: get("input_offset"),
                hysteresis: get("hysteresis"),
            }),
            "nmos" | "pmos" => PartSpec::Mosfet(MosfetParams {
                polarity: if kind == "nmos" { 1.0 } else { -1.0 },
                threshold_voltage: get("threshold_voltage"),
                transconductance: get("transconductance"),
                channel_length_modulation: get("channel_length_modulation"),
                body_diode: (get("body_diode") != 0.0).then(|| DiodeParams {
                    saturation_current: get("body_diode_saturation_current"),
                    emission_coefficient: get("body_diode_emission_coefficient"),
                    series_resistance: 0.0,
                    breakdown: None,
                }),
            }),
            "npn" | "pnp" => PartSpec::Bipolar(BipolarParams {
                polarity: if kind == "npn" { 1.0 } else { -1.0 },
                saturation_current: get("saturation_current"),
                forward_beta: get("forward_beta"),
                reverse_beta: get("reverse_beta"),
            }),
            "regulator" => PartSpec::Regulator(RegulatorParams {
                output_voltage: get("output_voltage"),
                dropout_voltage: get("dropout_voltage"),
                quiescent_current: get("quiescent_current"),
                current_limit: get("current_limit"),
                output_resistance: get("output_resistance"),
            }),
            "relay" => {
                let (pickup, dropout) = (get("pickup_current"), get("dropout_current"));
                if dropout >= pickup {
                    self.problem(
                        values
                            .get("dropout_current")
                            .map_or(name_span, |l| l.span.clone()),
                        &format!("{path}.dropout_current"),
                        format!("must be below pickup_current ({pickup} A)"),
                    );
                    return None;
                }
                let bounce_count = get("bounce_count");
                if bounce_count > 0.0 && get("bounce_time") <= 0.0 {
                    self.problem(
                        values
                            .get("bounce_count")
                            .map_or(name_span, |l| l.span.clone()),
                        &format!("{path}.bounce_time"),
                        "bounces need a positive bounce_time",
                    );
                    return None;
                }
                PartSpec::Relay(RelayParams {
                    coil_resistance: get("coil_resistance"),
                    coil_inductance: get("coil_inductance"),
                    pickup_current: pickup,
                    dropout_current: dropout,
                    close_travel: get("close_travel"),
                    open_travel: get("open_travel"),
                    bounce_count: bounce_count as u32,
                    bounce_time: get("bounce_time"),
                    contact_resistance: get("contact_resistance"),
                    open_resistance: get("open_resistance"),
                    normally_closed_connected: true,
                })
            }
            "timer" => PartSpec::Timer(TimerParams {
                high_headroom: get("high_headroom"),
                low_headroom: get("low_headroom"),
                output_resistance: get("output_resistance"),
                discharge_resistance: get("discharge_resistance"),
                reset_voltage: get("reset_voltage"),
                supply_current: get("supply_current"),
            }),
            _ => return None,
        })
    }

    /// Connection checks: lone nodes, floating groups, source/inductor loops.
    fn topology(&mut self, nodes: &[String], parts: &[Part], origins: &[PartOrigin]) {
        // Pins that conduct to one another inside a part (for floating-group search), and
        // pins whose node counts as connected.
        let mut connections: Vec<Vec<(usize, usize)>> = vec![Vec::new(); nodes.len()];
        for (pi, part) in parts.iter().enumerate() {
            for (k, &node) in part.pins.iter().enumerate() {
                connections[node].push((pi, k));
            }
        }
        for (node, list) in connections.iter().enumerate().skip(1) {
            if list.len() == 1 {
                let (pi, k) = list[0];
                let part = &parts[pi];
                self.problem(
                    origins[pi].pin_spans[k].clone(),
                    &format!("part.{}.pins.{}", part.name, part.spec.pin_names()[k]),
                    format!(
                        "node `{}` has only one connection (pin {} of `{}`); connect it to something else or remove it",
                        nodes[node], part.spec.pin_names()[k], part.name
                    ),
                );
            }
        }

        // Floating groups: union the pins that conduct to one another.
        let mut groups = UnionFind::new(nodes.len());
        for part in parts {
            for (x, y) in conductive_pairs(&part.spec) {
                groups.union(part.pins[x], part.pins[y]);
            }
        }
        let mut floating: HashMap<usize, Vec<usize>> = HashMap::new();
        for node in 1..nodes.len() {
            let root = groups.find(node);
            if root != groups.find(0) {
                floating.entry(root).or_default().push(node);
            }
        }
        let mut floating: Vec<Vec<usize>> = floating.into_values().collect();
        floating.sort();
        for group in floating {
            let names: Vec<&str> = group.iter().map(|&n| nodes[n].as_str()).collect();
            let (pi, k) = connections[group[0]][0];
            self.problem(
                origins[pi].pin_spans[k].clone(),
                &format!("part.{}.pins", parts[pi].name),
                format!(
                    "no path to gnd from node{} {} (a floating group: give it a connection to gnd, e.g. through a resistor)",
                    if names.len() > 1 { "s" } else { "" },
                    names.join(", ")
                ),
            );
        }

        // Loops of voltage sources and resistance-free inductive branches.
        let mut stiff = UnionFind::new(nodes.len());
        let mut edges: Vec<(usize, usize, usize)> = Vec::new();
        for (pi, part) in parts.iter().enumerate() {
            for (x, y) in stiff_branches(&part.spec) {
                let (a, b) = (part.pins[x], part.pins[y]);
                if stiff.find(a) == stiff.find(b) {
                    let mut loop_parts = path_between(&edges, a, b)
                        .into_iter()
                        .map(|e| parts[e].name.clone())
                        .collect::<Vec<_>>();
                    loop_parts.push(part.name.clone());
                    loop_parts.dedup();
                    self.problem(
                        origins[pi].name_span.clone(),
                        &format!("part.{}", part.name),
                        format!(
                            "loop of voltage sources and resistance-free inductors: {} (add a series resistance)",
                            loop_parts.join(" -> ")
                        ),
                    );
                } else {
                    stiff.union(a, b);
                    edges.push((a, b, pi));
                }
            }
        }
    }
}

/// Pin pairs of a part that conduct to each other at DC or through its own element.
fn conductive_pairs(spec: &PartSpec) -> Vec<(usize, usize)> {
    match spec {
        PartSpec::Transformer(_) => vec![(0, 1), (2, 3)],
        PartSpec::Bridge(_) => vec![(0, 2), (1, 2), (0, 3)],
        PartSpec::Switch(_) => vec![(0, 1), (2, 3)],
        // Inputs draw no current; the output is driven from ground, the supply pins conduct.
        PartSpec::Comparator(_) => vec![(2, 4), (3, 4)],
        PartSpec::Mosfet(_) | PartSpec::Bipolar(_) => vec![(0, 2), (1, 2)],
        PartSpec::Regulator(_) => vec![(0, 2), (1, 2)],
        PartSpec::Relay(r) if r.normally_closed_connected => vec![(0, 1), (2, 3), (2, 4)],
        PartSpec::Relay(_) => vec![(0, 1), (2, 3)],
        PartSpec::Timer(_) => vec![(0, 1), (5, 1), (6, 1), (2, 1), (3, 1), (4, 1)],
        _ => vec![(0, 1)],
    }
}

/// Branches that fix a voltage or are ideal inductors (no resistance).
fn stiff_branches(spec: &PartSpec) -> Vec<(usize, usize)> {
    match spec {
        PartSpec::VoltageSource(_) => vec![(0, 1)],
        PartSpec::Relay(_) => Vec::new(),
        PartSpec::Inductor {
            series_resistance, ..
        } if *series_resistance == 0.0 => vec![(0, 1)],
        PartSpec::Transformer(t) => {
            let mut v = Vec::new();
            if t.primary_resistance == 0.0 {
                v.push((0, 1));
            }
            if t.secondary_resistance == 0.0 {
                v.push((2, 3));
            }
            v
        }
        _ => Vec::new(),
    }
}

/// Part indices along the path from `a` to `b` in a forest of (node, node, part) edges.
fn path_between(edges: &[(usize, usize, usize)], a: usize, b: usize) -> Vec<usize> {
    let mut previous: HashMap<usize, (usize, usize)> = HashMap::new();
    let mut queue = std::collections::VecDeque::from([a]);
    let mut seen = vec![a];
    while let Some(n) = queue.pop_front() {
        if n == b {
            break;
        }
        for &(x, y, part) in edges {
            let next = if x == n {
                y
            } else if y == n {
                x
            } else {
                continue;
            };
            if !seen.contains(&next) {
                seen.push(next);
                previous.insert(next, (n, part));
                queue.push_back(next);
            }
        }
    }
    let mut path = Vec::new();
    let mut at = b;
    while let Some(&(from, part)) = previous.get(&at) {
        path.push(part);
        at = from;
    }
    path.reverse();
    path
}

struct UnionFind {
    parent: Vec<usize>,
}

impl UnionFind {
    fn new(n: usize) -> Self {
        Self {
            parent: (0..n).collect(),
        }
    }
    fn find(&mut self, mut x: usize) -> usize {
        while self.parent[x] != x {
            self.parent[x] = self.parent[self.parent[x]];
            x = self.parent[x];
        }
        x
    }
    fn union(&mut self, a: usize, b: usize) {
        let (ra, rb) = (self.find(a), self.find(b));
        if ra != rb {
            // Keep gnd (0) as a root so its group is easy to find.
            if ra < rb {
                self.parent[rb] = ra;
            } else {
                self.parent[ra] = rb;
            }
        }
    }
}

/// "a boolean", "an integer": a TOML type name with its article.
fn with_article(name: &str) -> String {
    let article = if name.starts_with(['a', 'e', 'i', 'o', 'u']) {
        "an"
    } else {
        "a"
    };
    format!("{article} {name}")
}
