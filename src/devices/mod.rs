//! Device models: what each part adds to the modified-nodal-analysis system.
//!
//! Devices are a closed enum with `match` dispatch. Each holds its parameters and the
//! indices of the unknowns it touches (resolved once when the circuit is compiled); per
//! Newton iteration it adds numbers into the matrix and right-hand side ("stamps") from the
//! present guess, its committed integration history and its discrete mode. Devices never
//! own the matrix and never choose the step.
//!
//! Index 0 of the unknown vector is the reference node: it is kept in the vectors so that
//! stamping needs no branches, and the solver ignores row and column 0.

mod bipolar;
mod comparator;
mod diode;
mod mosfet;
mod passive;
mod regulator;
mod relay;
mod sources;
mod switch;
mod timer;

pub(crate) use bipolar::{Bipolar, BIPOLAR_SCRATCH};
pub(crate) use comparator::Comparator;
pub(crate) use diode::Junction;
pub(crate) use mosfet::Mosfet;
pub(crate) use passive::Windings;
pub(crate) use regulator::Regulator;
pub(crate) use relay::Relay;
pub use relay::RelayState;
pub(crate) use timer::Timer;

pub mod events;

use crate::waveform::Waveform;
use events::{ContactAction, EventKind, Scheduled};

/// How time derivatives are discretised for one solve.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Method {
    /// Operating point: capacitors open, inductors shorted (through their resistance).
    OperatingPoint,
    /// Backward Euler: first order, L-stable, used right after a breakpoint.
    BackwardEuler,
    /// Trapezoidal rule: second order, used everywhere else.
    Trapezoidal,
}

/// Everything a device needs to know about the solve in progress.
#[derive(Clone, Copy, Debug)]
pub(crate) struct SolveContext {
    /// Time at the end of the step (the instant being solved for), seconds.
    pub time: f64,
    /// Step length, seconds (unused for the operating point).
    pub h: f64,
    /// Integration method.
    pub method: Method,
    /// Multiplier on every independent source (source stepping), 1 in normal runs.
    pub source_scale: f64,
    /// Conductance added across every junction, siemens.
    pub gmin: f64,
    /// Conductance from every node to the reference, siemens (raised in gmin stepping).
    pub shunt: f64,
    /// The step ends exactly on a breakpoint: sources take their value just before it.
    pub left_limit: bool,
}

impl SolveContext {
    /// A source's value for this solve (scaled, left limit at a breakpoint).
    #[inline]
    pub fn source(&self, waveform: &Waveform) -> f64 {
        self.source_scale * waveform.value_from(self.time, self.left_limit)
    }
}

/// The matrix and right-hand side being assembled, `dim` x `dim`, row-major.
pub(crate) struct Mna<'a> {
    pub dim: usize,
    pub a: &'a mut [f64],
    pub b: &'a mut [f64],
    /// Structure pass: mark every touched entry with 1 instead of adding values, so the
    /// solver learns which entries can ever be nonzero.
    pub structural: bool,
}

impl Mna<'_> {
    #[inline]
    pub fn add(&mut self, row: usize, col: usize, value: f64) {
        let entry = &mut self.a[row * self.dim + col];
        if self.structural {
            *entry = 1.0;
        } else {
            *entry += value;
        }
    }

    /// A conductance `g` between nodes `p` and `n`.
    #[inline]
    pub fn conductance(&mut self, p: usize, n: usize, g: f64) {
        self.add(p, p, g);
        self.add(n, n, g);
        self.add(p, n, -g);
        self.add(n, p, -g);
    }

    /// A fixed current `i` flowing through an element from node `p` to node `n`.
    #[inline]
    pub fn current(&mut self, p: usize, n: usize, i: f64) {
        self.b[p] -= i;
        self.b[n] += i;
    }

    /// A nonlinear current `i0 + sum g_k (v(nodes_k) - x(nodes_k))` flowing through an
    /// element from `p` to `n`, linearised at `x`.
    #[inline]
    pub fn nonlinear_current(
        &mut self,
        p: usize,
        n: usize,
        i0: f64,
        nodes: &[usize],
        g: &[f64],
        x: &[f64],
    ) {
        let mut i_eq = i0;
        for (&node, &gk) in nodes.iter().zip(g) {
            self.add(p, node, gk);
            self.add(n, node, -gk);
            i_eq -= gk * x[node];
        }
        self.current(p, n, i_eq);
    }

    /// The incidence of branch current unknown `branch` flowing from `p` to `n`.
    #[inline]
    pub fn branch_incidence(&mut self, p: usize, n: usize, branch: usize) {
        self.add(p, branch, 1.0);
        self.add(n, branch, -1.0);
        self.add(branch, p, 1.0);
        self.add(branch, n, -1.0);
    }
}

/// The discrete state of a device that has one.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Mode {
    /// The device has no discrete state.
    Continuous,
    /// A voltage-controlled switch.
    Switch {
        /// Whether it is closed.
        closed: bool,
    },
    /// A relay's armature and contacts.
    Relay(RelayState),
    /// A timer's flip-flop.
    Timer {
        /// Whether the flip-flop is set (output high).
        set: bool,
    },
}

/// A compiled device.
#[derive(Clone, Debug)]
pub(crate) enum Device {
    Resistor {
        a: usize,
        b: usize,
        g: f64,
    },
    Capacitor {
        a: usize,
        b: usize,
        capacitance: f64,
        initial_voltage: f64,
        /// History slots: [voltage, current, previous current].
        hist: usize,
        /// Whether its truncation error controls the step (not for behavioural lags).
        checked: bool,
    },
    /// One inductor or a set of coupled windings.
    Windings(Windings),
    VoltageSource {
        p: usize,
        n: usize,
        branch: usize,
        waveform: Waveform,
    },
    CurrentSource {
        from: usize,
        to: usize,
        waveform: Waveform,
    },
    Diode {
        /// Anode pin node.
        anode: usize,
        /// Junction anode: an internal node when there is series resistance.
        inner: usize,
        cathode: usize,
        /// Series conductance (0 when `inner == anode`).
        series_g: f64,
        junction: Junction,
        /// Newton scratch slots: [limited voltage, conductance, equivalent current, limited flag].
        scratch: usize,
    },
    Switch {
        a: usize,
        b: usize,
        control_p: usize,
        control_n: usize,
        on_voltage: f64,
        off_voltage: f64,
        on_g: f64,
        off_g: f64,
    },
    Comparator(Comparator),
    Mosfet(Mosfet),
    Bipolar(Bipolar),
    Regulator(Regulator),
    Relay(Relay),
    Timer(Timer),
}

/// Newton scratch slots a diode uses.
pub(crate) const DIODE_SCRATCH: usize = 4;

impl Device {
    /// Adds this device's linearised contribution at the guess `x`.
    #[inline]
    pub fn stamp(
        &self,
        m: &mut Mna<'_>,
        ctx: &SolveContext,
        x: &[f64],
        hist: &[f64],
        mode: Mode,
        scratch: &mut [f64],
    ) {
        match self {
            Device::Resistor { a, b, g } => m.conductance(*a, *b, *g),
            Device::Capacitor {
                a,
                b,
                capacitance,
                hist: h,
                ..
            } => passive::stamp_capacitor(m, ctx, *a, *b, *capacitance, &hist[*h..*h + 3]),
            Device::Windings(w) => w.stamp(m, ctx, hist),
            Device::VoltageSource {
                p,
                n,
                branch,
                waveform,
            } => sources::stamp_voltage(m, ctx, *p, *n, *branch, waveform),
            Device::CurrentSource { from, to, waveform } => {
                m.current(*from, *to, ctx.source(waveform));
            }
            Device::Diode {
                anode,
                inner,
                cathode,
                series_g,
                junction,
                scratch: s,
            } => {
                if *series_g > 0.0 {
                    m.conductance(*anode, *inner, *series_g);
                }
                junction.stamp(
                    m,
                    ctx,
                    *inner,
                    *cathode,
                    x,
                    &mut scratch[*s..*s + DIODE_SCRATCH],
                );
            }
            Device::Switch {
                a, b, on_g, off_g, ..
            } => {
                let closed = matches!(mode, Mode::Switch { closed: true });
                m.conductance(*a, *b, if closed { *on_g } else { *off_g });
            }
            Device::Comparator(c) => c.stamp(m, x),
            Device::Mosfet(t) => t.stamp(m, x),
            Device::Bipolar(t) => t.stamp(m, x, ctx.gmin, scratch),
            Device::Regulator(r) => r.stamp(m, x),
            Device::Relay(r) => {
                if let Mode::Relay(state) = mode {
                    r.stamp(m, state);
                }
            }
            Device::Timer(t) => t.stamp(m, x, matches!(mode, Mode::Timer { set: true })),
        }
    }

    /// Whether the device's characteristic depends on the solution.
    pub fn is_nonlinear(&self) -> bool {
        self.has_regimes() || matches!(self, Device::Timer(_))
    }

    /// Prepares Newton scratch: the junction voltage that limiting starts from. It is the
    /// guess's own value unless the guess pushes the junction further forward than the
    /// last accepted solution beyond its critical voltage, where an extrapolation overshoot
    /// would start the exponential far out; then limiting starts from the accepted value.
    pub fn begin_newton(&self, accepted: &[f64], guess: &[f64], scratch: &mut [f64]) {
        match self {
            Device::Diode {
                inner,
                cathode,
                junction,
                scratch: s,
                ..
            } => {
                let v_accepted = accepted[*inner] - accepted[*cathode];
                let v_guess = guess[*inner] - guess[*cathode];
                scratch[*s] = junction.limiting_anchor(v_accepted, v_guess);
            }
            Device::Bipolar(t) => t.begin_newton(accepted, scratch),
            _ => {}
        }
    }

    /// Whether the linearisation used in the last iteration agrees with the device's own
    /// characteristic at the new solution `x`.
    pub fn converged(
        &self,
        x: &[f64],
        scratch: &[f64],
        gmin: f64,
        reltol: f64,
        abstol: f64,
    ) -> bool {
        match self {
            Device::Diode {
                inner,
                cathode,
                junction,
                scratch: s,
                ..
            } => junction.converged(
                x[*inner] - x[*cathode],
                &scratch[*s..*s + DIODE_SCRATCH],
                gmin,
                reltol,
                abstol,
            ),
            Device::Bipolar(t) => !t.limited(scratch),
            _ => true,
        }
    }

    /// Updates the integration history after a step is accepted (`x` is the new solution).
    pub fn commit(&self, ctx: &SolveContext, x: &[f64], hist: &mut [f64]) {
        match self {
            Device::Capacitor {
                a,
                b,
                capacitance,
                hist: h,
                ..
            } => passive::commit_capacitor(ctx, x[*a] - x[*b], *capacitance, &mut hist[*h..*h + 3]),
            Device::Windings(w) => w.commit(ctx, x, hist),
            _ => {}
        }
    }

    /// Sets the integration history for a run starting from rest: capacitors at their
    /// initial voltage, inductors at their initial current, nothing flowing.
    pub fn rest_history(&self, hist: &mut [f64]) {
        match self {
            Device::Capacitor {
                initial_voltage,
                hist: h,
                ..
            } => {
                hist[*h] = *initial_voltage;
                hist[*h + 1] = 0.0;
                hist[*h + 2] = 0.0;
            }
            Device::Windings(w) => w.rest_history(hist),
            _ => {}
        }
    }

    /// Sets the integration history consistent with an operating point `x`.
    pub fn steady_history(&self, x: &[f64], hist: &mut [f64]) {
        match self {
            Device::Capacitor { a, b, hist: h, .. } => {
                hist[*h] = x[*a] - x[*b];
                hist[*h + 1] = 0.0;
                hist[*h + 2] = 0.0;
            }
            Device::Windings(w) => w.steady_history(x, hist),
            _ => {}
        }
    }

    /// The next instant after `t` where this device's excitation is not smooth.
    pub fn next_breakpoint(&self, t: f64) -> f64 {
        match self {
            Device::VoltageSource { waveform, .. } | Device::CurrentSource { waveform, .. } => {
                waveform.next_breakpoint(t)
            }
            _ => f64::INFINITY,
        }
    }

    /// The mode a device starts in.
    pub fn initial_mode(&self) -> Mode {
        match self {
            Device::Switch { .. } => Mode::Switch { closed: false },
            Device::Relay(_) => Mode::Relay(RelayState::RELEASED),
            Device::Timer(_) => Mode::Timer { set: false },
            _ => Mode::Continuous,
        }
    }

    /// The crossing function of a device with a discrete state: it changes state when this
    /// becomes positive. `None` for devices without one.
    #[inline]
    pub fn crossing(&self, x: &[f64], mode: Mode) -> Option<f64> {
        match (self, mode) {
            (
                Device::Switch {
                    control_p,
                    control_n,
                    on_voltage,
                    off_voltage,
                    ..
                },
                Mode::Switch { closed },
            ) => Some(switch::crossing(
                x[*control_p] - x[*control_n],
                closed,
                *on_voltage,
                *off_voltage,
            )),
            (Device::Relay(r), Mode::Relay(state)) => Some(r.crossing(x, state)),
            (Device::Timer(t), Mode::Timer { set }) => Some(t.crossing(x, set)),
            _ => None,
        }
    }

    /// Applies the state change announced by a positive crossing function at `time`;
    /// a relay also schedules its contact sequence in `pending`.
    pub fn cross(
        &self,
        device: usize,
        time: f64,
        mode: &mut Mode,
        pending: &mut Vec<Scheduled>,
    ) -> Option<EventKind> {
        match (self, mode) {
            (Device::Switch { .. }, Mode::Switch { closed }) => {
                *closed = !*closed;
                Some(if *closed {
                    EventKind::SwitchClosed
                } else {
                    EventKind::SwitchOpened
                })
            }
            (Device::Relay(r), Mode::Relay(state)) => Some(r.cross(device, time, state, pending)),
            (Device::Timer(_), Mode::Timer { set }) => Some(Timer::cross(set)),
            _ => None,
        }
    }

    /// Applies a scheduled contact change.
    pub fn apply_scheduled(&self, action: ContactAction, mode: &mut Mode) -> Option<EventKind> {
        match mode {
            Mode::Relay(state) => Some(Relay::apply(action, state)),
            _ => None,
        }
    }

    /// Current through the device from its first to its second terminal, amperes.
    pub fn current(&self, time: f64, x: &[f64], hist: &[f64], mode: Mode) -> f64 {
        match self {
            Device::Resistor { a, b, g } => (x[*a] - x[*b]) * g,
            Device::Capacitor { hist: h, .. } => hist[*h + 1],
            Device::Windings(w) => x[w.branch[0]],
            Device::VoltageSource { branch, .. } => x[*branch],
            Device::CurrentSource { waveform, .. } => waveform.value(time),
            Device::Diode {
                inner,
                cathode,
                junction,
                ..
            } => junction.current(x[*inner] - x[*cathode]).0,
            Device::Switch {
                a, b, on_g, off_g, ..
            } => {
                let closed = matches!(mode, Mode::Switch { closed: true });
                (x[*a] - x[*b]) * if closed { *on_g } else { *off_g }
            }
            Device::Comparator(c) => c.current(x),
            Device::Mosfet(t) => t.evaluate(x).0,
            Device::Bipolar(t) => t.collector_current(x),
            Device::Regulator(r) => r.input_current(x),
            Device::Relay(_) => 0.0,
            Device::Timer(t) => t.output_current(x, matches!(mode, Mode::Timer { set: true })),
        }
    }

    /// The operating region of a device whose characteristic has corners: a junction is
    /// blocking (0) or conducting forward (1) or in breakdown (-1) by `on_current`; a
    /// transistor off or on; a comparator low, linear or high; a regulator off, regulating,
    /// in dropout or limiting. A step across which a region changes holds a corner the
    /// trapezoidal rule integrates badly; the engine shortens it and restarts after it.
    pub fn regime(&self, x: &[f64], on_current: f64) -> i8 {
        match self {
            Device::Diode {
                inner,
                cathode,
                junction,
                ..
            } => {
                let i = junction.current(x[*inner] - x[*cathode]).0;
                if i > on_current {
                    1
                } else if i < -on_current {
                    -1
                } else {
                    0
                }
            }
            Device::Comparator(c) => c.regime(x),
            Device::Mosfet(t) => t.regime(x, on_current),
            Device::Bipolar(t) => t.regime(x, on_current),
            Device::Regulator(r) => r.regime(x, on_current),
            _ => 0,
        }
    }

    /// Whether the device can change region (see [`Device::regime`]).
    pub fn has_regimes(&self) -> bool {
        matches!(
            self,
            Device::Diode { .. }
                | Device::Comparator(_)
                | Device::Mosfet(_)
                | Device::Bipolar(_)
                | Device::Regulator(_)
        )
    }

    /// The trapezoidal truncation error of a step to `x` estimated from the device's own
    /// derivative history, as (error, magnitude it is relative to, absolute tolerance);
    /// `None` for devices without integrated state. A capacitor reports its voltage error
    /// (volts), a winding its flux error (webers, absolute tolerance `L` times the current
    /// tolerance). `dt_prev` is the previous step's length.
    pub fn derivative_error(
        &self,
        ctx: &SolveContext,
        x: &[f64],
        hist: &[f64],
        dt_prev: f64,
        voltage_abstol: f64,
        current_abstol: f64,
    ) -> Option<(f64, f64, f64)> {
        match self {
            Device::Capacitor {
                a,
                b,
                capacitance,
                hist: h,
                checked: true,
                ..
            } => {
                let v = x[*a] - x[*b];
                let e = passive::capacitor_error(ctx, v, *capacitance, &hist[*h..*h + 3], dt_prev);
                Some((e, v.abs().max(hist[*h].abs()), voltage_abstol))
            }
            Device::Windings(w) => {
                let (e, flux, l) = w.error(ctx, x, hist, dt_prev);
                Some((e, flux, l * current_abstol))
            }
            _ => None,
        }
    }

    /// Quantities whose local truncation error the engine estimates by divided differences
    /// of the solution: (first index, second index, is a current). A voltage is
    /// `x[first] - x[second]`. Windings are checked on their fluxes by
    /// [`Device::derivative_error`] alone: an open winding's current says nothing of its
    /// flux.
    pub fn error_probes(&self, out: &mut Vec<(usize, usize, bool)>) {
        if let Device::Capacitor {
            a,
            b,
            checked: true,
            ..
        } = self
        {
            out.push((*a, *b, false));
        }
    }
}
