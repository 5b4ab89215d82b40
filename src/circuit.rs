//! The circuit as the engine sees it: named nodes and parts with resolved parameters.
//!
//! A [`Circuit`] is built by [`crate::circuit_file`] from a file (or by code) and is already
//! validated: every part has its pins and positive values. It holds no file positions; the
//! file module keeps those for its own error messages.

use crate::waveform::Waveform;

/// Index of a node in [`Circuit::nodes`]; `0` is the reference node `gnd`.
pub type NodeId = usize;

/// The name of the reference node.
pub const GROUND: &str = "gnd";

/// Absolute temperature used by every junction model, kelvin.
pub const TEMPERATURE_K: f64 = 300.0;

/// Thermal voltage kT/q at [`TEMPERATURE_K`] with the exact SI constants, volts.
pub const THERMAL_VOLTAGE: f64 = 1.380_649e-23 * TEMPERATURE_K / 1.602_176_634e-19;

/// A validated circuit.
#[derive(Clone, Debug)]
pub struct Circuit {
    /// A one-line description, from the file's `title`.
    pub title: String,
    /// Node names; index 0 is always `gnd`.
    pub nodes: Vec<String>,
    /// Parts in file order.
    pub parts: Vec<Part>,
    /// Named parameter sets declared in the file, for listings.
    pub parameter_sets: Vec<ParameterSetInfo>,
    /// Values that carry a tolerance, in file order.
    pub tolerances: Vec<Tolerance>,
}

/// A value of the circuit file that may vary between `min` and `max` (a part's tolerance).
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct Tolerance {
    /// The field, e.g. `part.r_top.resistance` or `parameter_set.rectifier.saturation_current`.
    pub field: String,
    /// The value written (used unless a case overrides it).
    pub nominal: f64,
    /// Lowest value.
    pub min: f64,
    /// Highest value.
    pub max: f64,
    /// Where it is written: line and column, from 1.
    pub line: usize,
    /// Column, from 1.
    pub column: usize,
}

/// A named, reusable parameter set as declared in the file.
#[derive(Clone, Debug)]
pub struct ParameterSetInfo {
    /// Set name.
    pub name: String,
    /// Family of parts it applies to (`diode`, `led`, `switch`).
    pub family: String,
    /// Parameters written in the set, as (name, value in SI units).
    pub values: Vec<(String, f64)>,
    /// Parts that use the set.
    pub used_by: Vec<String>,
}

/// One part: a name, its pins (in the order its kind defines) and what it is.
#[derive(Clone, Debug)]
pub struct Part {
    /// Unique name.
    pub name: String,
    /// Node of each pin, in the kind's pin order (see [`crate::circuit_file::pin_names`]).
    pub pins: Vec<NodeId>,
    /// Kind and parameters.
    pub spec: PartSpec,
}

/// What a part is, with its parameters in SI units.
#[derive(Clone, Debug)]
pub enum PartSpec {
    /// Linear resistor.
    Resistor {
        /// Ohms, positive.
        resistance: f64,
    },
    /// Linear capacitor.
    Capacitor {
        /// Farads, positive.
        capacitance: f64,
        /// Voltage (pin a minus pin b) at the start of a run from rest, volts.
        initial_voltage: Option<f64>,
    },
    /// Linear inductor with optional winding resistance.
    Inductor {
        /// Henries, positive.
        inductance: f64,
        /// Ohms in series, non-negative.
        series_resistance: f64,
        /// Current (a to b through the part) at the start of a run from rest, amperes.
        initial_current: Option<f64>,
    },
    /// Two magnetically coupled windings with their resistances.
    Transformer(TransformerParams),
    /// Independent voltage source.
    VoltageSource(Waveform),
    /// Independent current source; the current flows through the part from `from` to `to`.
    CurrentSource(Waveform),
    /// Junction diode (also zener, also light-emitting diode after conversion).
    Diode(DiodeParams),
    /// Four diodes in a full-wave bridge.
    Bridge(DiodeParams),
    /// Voltage-controlled switch with hysteresis.
    Switch(SwitchParams),
    /// Behavioural comparator.
    Comparator(ComparatorParams),
    /// Square-law MOSFET, N or P channel.
    Mosfet(MosfetParams),
    /// Ebers-Moll bipolar transistor, NPN or PNP.
    Bipolar(BipolarParams),
    /// Behavioural linear regulator.
    Regulator(RegulatorParams),
    /// Relay: coil, armature and a change-over contact set.
    Relay(RelayParams),
    /// Behavioural timer for astable and monostable circuits.
    Timer(TimerParams),
}

impl PartSpec {
    /// The kind's name as written in circuit files.
    pub fn kind_name(&self) -> &'static str {
        match self {
            PartSpec::Resistor { .. } => "resistor",
            PartSpec::Capacitor { .. } => "capacitor",
            PartSpec::Inductor { .. } => "inductor",
            PartSpec::Transformer(_) => "transformer",
            PartSpec::VoltageSource(_) => "voltage-source",
            PartSpec::CurrentSource(_) => "current-source",
            PartSpec::Diode(_) => "diode",
            PartSpec::Bridge(_) => "bridge",
            PartSpec::Switch(_) => "switch",
            PartSpec::Comparator(_) => "comparator",
            PartSpec::Mosfet(m) => {
                if m.polarity > 0.0 {
                    "nmos"
                } else {
                    "pmos"
                }
            }
            PartSpec::Bipolar(b) => {
                if b.polarity > 0.0 {
                    "npn"
                } else {
                    "pnp"
                }
            }
            PartSpec::Regulator(_) => "regulator",
            PartSpec::Relay(_) => "relay",
            PartSpec::Timer(_) => "timer",
        }
    }
}

/// Coupled windings: primary between pins 0-1, secondary between pins 2-3; the `_a` pins
/// are in phase.
#[derive(Clone, Debug, PartialEq)]
pub struct TransformerParams {
    /// Primary self-inductance, henries.
    pub primary_inductance: f64,
    /// Primary winding resistance, ohms.
    pub primary_resistance: f64,
    /// Secondary self-inductance, henries.
    pub secondary_inductance: f64,
    /// Secondary winding resistance, ohms.
    pub secondary_resistance: f64,
    /// Coupling coefficient k, 0 < k < 1; mutual inductance k sqrt(L1 L2).
    pub coupling: f64,
}

/// Junction diode parameters (Shockley law with series resistance and breakdown).
#[derive(Clone, Debug, PartialEq)]
pub struct DiodeParams {
    /// Saturation current Is, amperes.
    pub saturation_current: f64,
    /// Emission coefficient n.
    pub emission_coefficient: f64,
    /// Series resistance, ohms.
    pub series_resistance: f64,
    /// Reverse breakdown: the reverse voltage at which `breakdown_current` flows.
    pub breakdown: Option<Breakdown>,
}

/// Reverse breakdown of a junction.
#[derive(Clone, Debug, PartialEq)]
pub struct Breakdown {
    /// Reverse voltage (positive number) at `current`, volts.
    pub voltage: f64,
    /// Reverse current at `voltage`, amperes.
    pub current: f64,
    /// Dynamic (slope) resistance at `current`, ohms, from the junction alone.
    pub slope_resistance: f64,
}

/// Voltage-controlled switch parameters.
#[derive(Clone, Debug, PartialEq)]
pub struct SwitchParams {
    /// The switch closes when the control voltage rises through this, volts.
    pub on_voltage: f64,
    /// The switch opens when the control voltage falls through this, volts.
    pub off_voltage: f64,
    /// Closed resistance, ohms.
    pub on_resistance: f64,
    /// Open resistance, ohms.
    pub off_resistance: f64,
}

/// Behavioural comparator parameters.
#[derive(Clone, Debug, PartialEq)]
pub struct ComparatorParams {
    /// Output low level above the negative supply pin, volts.
    pub low_headroom: f64,
    /// Output high level below the positive supply pin, volts.
    pub high_headroom: f64,
    /// Open-loop gain at the threshold (slope of the transfer), volts per volt.
    pub gain: f64,
    /// Output resistance, ohms.
    pub output_resistance: f64,
    /// Time constant of the first-order output lag, seconds.
    pub response_time: f64,
    /// Input offset: the output switches at v(plus) - v(minus) = offset, volts.
    pub input_offset: f64,
    /// Built-in hysteresis band (full width), volts; 0 for none.
    pub hysteresis: f64,
}

/// Square-law MOSFET parameters (Shichman-Hodges).
#[derive(Clone, Debug, PartialEq)]
pub struct MosfetParams {
    /// +1 for N channel, -1 for P channel.
    pub polarity: f64,
    /// Threshold voltage magnitude, volts.
    pub threshold_voltage: f64,
    /// Transconductance factor K (saturation current (K/2)(Vgs - Vth)^2), A/V^2.
    pub transconductance: f64,
    /// Channel-length modulation lambda, 1/V.
    pub channel_length_modulation: f64,
    /// Body diode (source to drain for N channel), if present.
    pub body_diode: Option<DiodeParams>,
}

/// Ebers-Moll transport-model bipolar transistor parameters.
#[derive(Clone, Debug, PartialEq)]
pub struct BipolarParams {
    /// +1 for NPN, -1 for PNP.
    pub polarity: f64,
    /// Transport saturation current Is, amperes.
    pub saturation_current: f64,
    /// Forward current gain `beta_F`.
    pub forward_beta: f64,
    /// Reverse current gain `beta_R`.
    pub reverse_beta: f64,
}

/// Behavioural linear regulator parameters.
#[derive(Clone, Debug, PartialEq)]
pub struct RegulatorParams {
    /// Regulated output voltage above the common pin, volts.
    pub output_voltage: f64,
    /// Dropout: the output cannot rise above input minus this, volts.
    pub dropout_voltage: f64,
    /// Current drawn from the input to the common pin while powered, amperes.
    pub quiescent_current: f64,
    /// Largest output current, amperes.
    pub current_limit: f64,
    /// Output resistance while regulating, ohms.
    pub output_resistance: f64,
}

/// Relay parameters.
#[derive(Clone, Debug, PartialEq)]
pub struct RelayParams {
    /// Coil resistance, ohms.
    pub coil_resistance: f64,
    /// Coil inductance, henries.
    pub coil_inductance: f64,
    /// The armature picks up when the coil current rises through this, amperes.
    pub pickup_current: f64,
    /// The armature drops out when the coil current falls through this, amperes.
    pub dropout_current: f64,
    /// Time from pick-up to the normally-open contact making, seconds.
    pub close_travel: f64,
    /// Time from drop-out to the normally-open contact breaking, seconds.
    pub open_travel: f64,
    /// Number of bounces of a closing contact.
    pub bounce_count: u32,
    /// Time within which the bounces happen, seconds.
    pub bounce_time: f64,
    /// Closed contact resistance, ohms.
    pub contact_resistance: f64,
    /// Open contact resistance, ohms.
    pub open_resistance: f64,
    /// Whether the normally-closed pin is connected (it may be left out).
    pub normally_closed_connected: bool,
}

/// Behavioural timer parameters (the classic 1/3, 2/3 supply arrangement).
#[derive(Clone, Debug, PartialEq)]
pub struct TimerParams {
    /// Output high level below the positive supply, volts.
    pub high_headroom: f64,
    /// Output low level above the negative supply, volts.
    pub low_headroom: f64,
    /// Output resistance, ohms.
    pub output_resistance: f64,
    /// Discharge switch on resistance, ohms.
    pub discharge_resistance: f64,
    /// The reset pin resets the flip-flop below this (above the negative supply), volts.
    pub reset_voltage: f64,
    /// Supply current drawn while powered, amperes.
    pub supply_current: f64,
}

impl Circuit {
    /// Node index by name.
    pub fn node(&self, name: &str) -> Option<NodeId> {
        self.nodes.iter().position(|n| n == name)
    }

    /// Part index by name.
    pub fn part(&self, name: &str) -> Option<usize> {
        self.parts.iter().position(|p| p.name == name)
    }

    /// The fundamental frequency of the first sine source, if any (the mains).
    pub fn mains_frequency_hz(&self) -> Option<f64> {
        self.parts.iter().find_map(|p| match &p.spec {
            PartSpec::VoltageSource(w) | PartSpec::CurrentSource(w) => w.frequency_hz(),
            _ => None,
        })
    }
}
