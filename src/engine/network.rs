//! Compiling a [`Circuit`] into the engine's form: unknowns, devices and their slots.

use crate::circuit::{Circuit, PartSpec};
use crate::devices::{
    Bipolar, Comparator, Device, Junction, Mode, Mosfet, Regulator, Relay, Timer, Windings,
    BIPOLAR_SCRATCH, DIODE_SCRATCH,
};

/// What an unknown of the system is.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum UnknownKind {
    /// A node voltage (index into the circuit's nodes).
    Node(usize),
    /// A branch current of a part.
    Branch {
        /// Index of the part.
        part: usize,
    },
    /// An internal node of a part (e.g. behind a diode's series resistance).
    Internal {
        /// Index of the part.
        part: usize,
    },
}

/// The circuit compiled for simulation. Immutable during a run.
#[derive(Clone, Debug)]
pub struct Network {
    pub(crate) circuit: Circuit,
    pub(crate) devices: Vec<Device>,
    /// Originating part of each device.
    pub(crate) device_part: Vec<usize>,
    /// For each part: its devices with the sign of their current into the part's first pin.
    pub(crate) part_devices: Vec<Vec<(usize, f64)>>,
    /// Names and kinds of the unknowns; index 0 is the reference node.
    pub(crate) unknowns: Vec<(String, UnknownKind)>,
    pub(crate) history_len: usize,
    pub(crate) scratch_len: usize,
    /// Quantities whose local truncation error controls the step.
    pub(crate) error_probes: Vec<(usize, usize, bool)>,
    /// Devices with a discrete state.
    pub(crate) discrete_devices: Vec<usize>,
    /// Devices with operating regions (corners).
    pub(crate) regime_devices: Vec<usize>,
    pub(crate) nonlinear: bool,
}

impl Network {
    /// Compiles a validated circuit: each part into its devices (`Builder`), then the
    /// lists the stepper consults (error probes, discrete and regime devices).
    pub fn new(circuit: &Circuit) -> Self {
        let mut b = Builder {
            unknowns: circuit
                .nodes
                .iter()
                .enumerate()
                .map(|(i, n)| (n.clone(), UnknownKind::Node(i)))
                .collect(),
            devices: Vec::new(),
            device_part: Vec::new(),
            part_devices: Vec::new(),
            history_len: 0,
            scratch_len: 0,
        };
        for (pi, part) in circuit.parts.iter().enumerate() {
            b.part(pi, part);
        }
        let Builder {
            unknowns,
            devices,
            device_part,
            part_devices,
            history_len,
            scratch_len,
        } = b;
        let mut error_probes = Vec::new();
        for d in &devices {
            d.error_probes(&mut error_probes);
        }
        let discrete_devices = devices
            .iter()
            .enumerate()
            .filter(|(_, d)| d.initial_mode() != Mode::Continuous)
            .map(|(i, _)| i)
            .collect();
        let regime_devices = devices
            .iter()
            .enumerate()
            .filter(|(_, d)| d.has_regimes())
            .map(|(i, _)| i)
            .collect();
        let nonlinear = devices.iter().any(Device::is_nonlinear);
        Network {
            circuit: circuit.clone(),
            devices,
            device_part,
            part_devices,
            unknowns,
            history_len,
            scratch_len,
            error_probes,
            discrete_devices,
            regime_devices,
            nonlinear,
        }
    }

    /// The circuit this network was compiled from.
    pub fn circuit(&self) -> &Circuit {
        &self.circuit
    }

    /// Number of unknowns including the reference node.
    pub fn dim(&self) -> usize {
        self.unknowns.len()
    }

    /// Name of unknown `i`: a node name, `i(part)` for a branch current, or
    /// `part#junction` for an internal node.
    pub fn unknown_name(&self, i: usize) -> &str {
        &self.unknowns[i].0
    }

    /// Name of the part an unknown belongs to, or the node name.
    pub fn unknown_owner(&self, i: usize) -> String {
        match &self.unknowns[i].1 {
            UnknownKind::Node(n) => format!("node `{}`", self.circuit.nodes[*n]),
            UnknownKind::Branch { part } | UnknownKind::Internal { part } => {
                format!("part `{}`", self.circuit.parts[*part].name)
            }
        }
    }
}

/// Gathers a circuit's unknowns, devices and slots while its parts are compiled.
struct Builder {
    unknowns: Vec<(String, UnknownKind)>,
    devices: Vec<Device>,
    device_part: Vec<usize>,
    part_devices: Vec<Vec<(usize, f64)>>,
    history_len: usize,
    scratch_len: usize,
}

/// Adds a device with the sign of its current into the part's first pin.
fn emit(out: &mut Vec<(Device, f64)>, device: Device, sign: f64) {
    out.push((device, sign));
}

impl Builder {
    /// A new unknown (a branch current or an internal node); its index.
    fn unknown(&mut self, name: String, kind: UnknownKind) -> usize {
        self.unknowns.push((name, kind));
        self.unknowns.len() - 1
    }

    /// Compiles part `pi` into its devices.
    fn part(&mut self, pi: usize, part: &crate::circuit::Part) {
        use PartSpec as P;
        let devices = match &part.spec {
            P::Resistor { .. }
            | P::Capacitor { .. }
            | P::Inductor { .. }
            | P::Transformer(_)
            | P::VoltageSource(_)
            | P::CurrentSource(_)
            | P::Switch(_) => self.passive_devices(pi, part),
            P::Diode(_) | P::Bridge(_) | P::Mosfet(_) | P::Bipolar(_) => {
                self.semiconductor_devices(pi, part)
            }
            P::Comparator(_) | P::Regulator(_) | P::Relay(_) | P::Timer(_) => {
                self.control_devices(pi, part)
            }
        };
        let mut own = Vec::with_capacity(devices.len());
        for (device, sign) in devices {
            own.push((self.devices.len(), sign));
            self.devices.push(device);
            self.device_part.push(pi);
        }
        self.part_devices.push(own);
    }

    /// The devices of a part of this family: resistors, capacitors, inductors, transformers, sources and switches.
    ///
    /// One arm per part kind, each a few lines: kept whole so that every kind's compilation
    /// reads side by side (over 120 lines).
    fn passive_devices(&mut self, pi: usize, part: &crate::circuit::Part) -> Vec<(Device, f64)> {
        let pins = &part.pins;
        let mut out = Vec::new();
        match &part.spec {
            PartSpec::Resistor { resistance } => emit(
                &mut out,
                Device::Resistor {
                    a: pins[0],
                    b: pins[1],
                    g: 1.0 / resistance,
                },
                1.0,
            ),
            PartSpec::Capacitor {
                capacitance,
                initial_voltage,
            } => {
                emit(
                    &mut out,
                    Device::Capacitor {
                        a: pins[0],
                        b: pins[1],
                        capacitance: *capacitance,
                        initial_voltage: initial_voltage.unwrap_or(0.0),
                        hist: self.history_len,
                        checked: true,
                    },
                    1.0,
                );
                self.history_len += 3;
            }
            PartSpec::Inductor {
                inductance,
                series_resistance,
                initial_current,
            } => {
                let branch = self.unknown(
                    format!("i({})", part.name),
                    UnknownKind::Branch { part: pi },
                );
                emit(
                    &mut out,
                    Device::Windings(Windings::single(
                        (pins[0], pins[1]),
                        branch,
                        *inductance,
                        *series_resistance,
                        initial_current.unwrap_or(0.0),
                        self.history_len,
                    )),
                    1.0,
                );
                self.history_len += 3;
            }
            PartSpec::Transformer(t) => {
                let b1 = self.unknown(
                    format!("i({}.primary)", part.name),
                    UnknownKind::Branch { part: pi },
                );
                let b2 = self.unknown(
                    format!("i({}.secondary)", part.name),
                    UnknownKind::Branch { part: pi },
                );
                let m = t.coupling * (t.primary_inductance * t.secondary_inductance).sqrt();
                emit(
                    &mut out,
                    Device::Windings(Windings {
                        count: 2,
                        pins: [(pins[0], pins[1]), (pins[2], pins[3])],
                        branch: [b1, b2],
                        inductance: [[t.primary_inductance, m], [m, t.secondary_inductance]],
                        resistance: [t.primary_resistance, t.secondary_resistance],
                        initial_current: [0.0; 2],
                        hist: self.history_len,
                    }),
                    1.0,
                );
                self.history_len += 6;
            }
            PartSpec::VoltageSource(waveform) => {
                let branch = self.unknown(
                    format!("i({})", part.name),
                    UnknownKind::Branch { part: pi },
                );
                emit(
                    &mut out,
                    Device::VoltageSource {
                        p: pins[0],
                        n: pins[1],
                        branch,
                        waveform: waveform.clone(),
                    },
                    1.0,
                );
            }
            PartSpec::CurrentSource(waveform) => emit(
                &mut out,
                Device::CurrentSource {
                    from: pins[0],
                    to: pins[1],
                    waveform: waveform.clone(),
                },
                1.0,
            ),
            PartSpec::Switch(s) => emit(
                &mut out,
                Device::Switch {
                    a: pins[0],
                    b: pins[1],
                    control_p: pins[2],
                    control_n: pins[3],
                    on_voltage: s.on_voltage,
                    off_voltage: s.off_voltage,
                    on_g: 1.0 / s.on_resistance,
                    off_g: 1.0 / s.off_resistance,
                },
                1.0,
            ),
            // Parts of the other families are compiled by their own method.
            _ => {}
        }
        out
    }

    /// The devices of a part of this family: diodes, bridges, MOSFETs and bipolar transistors.
    fn semiconductor_devices(
        &mut self,
        pi: usize,
        part: &crate::circuit::Part,
    ) -> Vec<(Device, f64)> {
        let pins = &part.pins;
        let mut out = Vec::new();
        match &part.spec {
            PartSpec::Diode(p) | PartSpec::Bridge(p) => {
                // A bridge is four diodes: ac_a->dc_plus, ac_b->dc_plus,
                // dc_minus->ac_a, dc_minus->ac_b.
                let junctions: &[(usize, usize, f64, &str)] = match &part.spec {
                    PartSpec::Diode(_) => &[(0, 1, 1.0, "")],
                    _ => &[
                        (0, 2, 1.0, ".1"),
                        (1, 2, 0.0, ".2"),
                        (3, 0, -1.0, ".3"),
                        (3, 1, 0.0, ".4"),
                    ],
                };
                for &(an, ca, sign, suffix) in junctions {
                    let (anode, cathode) = (pins[an], pins[ca]);
                    let (inner, series_g) = if p.series_resistance > 0.0 {
                        let inner = self.unknown(
                            format!("{}{}#junction", part.name, suffix),
                            UnknownKind::Internal { part: pi },
                        );
                        (inner, 1.0 / p.series_resistance)
                    } else {
                        (anode, 0.0)
                    };
                    emit(
                        &mut out,
                        Device::Diode {
                            anode,
                            inner,
                            cathode,
                            series_g,
                            junction: Junction::new(p),
                            scratch: self.scratch_len,
                        },
                        sign,
                    );
                    self.scratch_len += DIODE_SCRATCH;
                }
            }
            PartSpec::Mosfet(m) => {
                let (drain, gate, source) = (pins[0], pins[1], pins[2]);
                emit(
                    &mut out,
                    Device::Mosfet(Mosfet {
                        drain,
                        gate,
                        source,
                        params: m.clone(),
                    }),
                    1.0,
                );
                if let Some(d) = &m.body_diode {
                    // Source to drain for N channel, drain to source for P.
                    let (anode, cathode) = if m.polarity > 0.0 {
                        (source, drain)
                    } else {
                        (drain, source)
                    };
                    emit(
                        &mut out,
                        Device::Diode {
                            anode,
                            inner: anode,
                            cathode,
                            series_g: 0.0,
                            junction: Junction::new(d),
                            scratch: self.scratch_len,
                        },
                        -m.polarity,
                    );
                    self.scratch_len += DIODE_SCRATCH;
                }
            }
            PartSpec::Bipolar(b) => {
                emit(
                    &mut out,
                    Device::Bipolar(Bipolar {
                        collector: pins[0],
                        base: pins[1],
                        emitter: pins[2],
                        params: b.clone(),
                        scratch: self.scratch_len,
                    }),
                    1.0,
                );
                self.scratch_len += BIPOLAR_SCRATCH;
            }
            // Parts of the other families are compiled by their own method.
            _ => {}
        }
        out
    }

    /// The devices of a part of this family: comparators, regulators, relays and timers.
    ///
    /// One arm per part kind, kept whole like `passive_devices`.
    fn control_devices(&mut self, pi: usize, part: &crate::circuit::Part) -> Vec<(Device, f64)> {
        let pins = &part.pins;
        let mut out = Vec::new();
        match &part.spec {
            PartSpec::Comparator(c) => {
                let lag = self.unknown(
                    format!("{}#lag", part.name),
                    UnknownKind::Internal { part: pi },
                );
                // The lag: 1 S and `response_time` farads from the lag node to ground.
                emit(
                    &mut out,
                    Device::Resistor {
                        a: lag,
                        b: 0,
                        g: 1.0,
                    },
                    0.0,
                );
                emit(
                    &mut out,
                    Device::Capacitor {
                        a: lag,
                        b: 0,
                        capacitance: c.response_time,
                        initial_voltage: 0.0,
                        hist: self.history_len,
                        checked: true,
                    },
                    0.0,
                );
                self.history_len += 3;
                emit(
                    &mut out,
                    Device::Comparator(Comparator {
                        plus: pins[0],
                        minus: pins[1],
                        output: pins[2],
                        supply_plus: pins[3],
                        supply_minus: pins[4],
                        lag,
                        params: c.clone(),
                    }),
                    -1.0,
                );
            }
            PartSpec::Regulator(r) => {
                let branch = self.unknown(
                    format!("i({}.pass)", part.name),
                    UnknownKind::Branch { part: pi },
                );
                emit(
                    &mut out,
                    Device::Regulator(Regulator {
                        input: pins[0],
                        output: pins[1],
                        common: pins[2],
                        branch,
                        params: r.clone(),
                    }),
                    1.0,
                );
            }
            PartSpec::Relay(r) => {
                let coil_branch = self.unknown(
                    format!("i({}.coil)", part.name),
                    UnknownKind::Branch { part: pi },
                );
                emit(
                    &mut out,
                    Device::Windings(Windings::single(
                        (pins[0], pins[1]),
                        coil_branch,
                        r.coil_inductance,
                        r.coil_resistance,
                        0.0,
                        self.history_len,
                    )),
                    1.0,
                );
                self.history_len += 3;
                emit(
                    &mut out,
                    Device::Relay(Relay {
                        coil_branch,
                        common: pins[2],
                        normally_open: pins[3],
                        normally_closed: pins[4],
                        params: r.clone(),
                    }),
                    0.0,
                );
            }
            PartSpec::Timer(t) => emit(
                &mut out,
                Device::Timer(Timer {
                    supply_plus: pins[0],
                    supply_minus: pins[1],
                    trigger: pins[2],
                    threshold: pins[3],
                    reset: pins[4],
                    output: pins[5],
                    discharge: pins[6],
                    params: t.clone(),
                }),
                -1.0,
            ),
            // Parts of the other families are compiled by their own method.
            _ => {}
        }
        out
    }
}
