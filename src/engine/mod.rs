//! The transient engine: modified nodal analysis, Newton-Raphson, adaptive trapezoidal
//! integration with damped restarts, breakpoints and located discrete events.
//!
//! Three pieces, kept apart so that a run can be paused, cloned and resumed:
//! - [`Settings`]: tolerances and step limits (plain data, each default documented);
//! - [`SimState`]: everything that evolves (time, solution, integration history, discrete
//!   modes, the recent past used for error estimates, the proposed next step). It is one
//!   cloneable value: settle once, clone, and run many events from the copy;
//! - [`Simulator`]: the compiled [`Network`] plus scratch buffers, allocated once; the
//!   per-step loop allocates nothing.
//!
//! Observers receive each accepted step and each discrete event through [`Observer`].

mod lu;
mod network;

pub use lu::{DenseLu, RefactorError, Singular, SparseLu};
pub use network::{Network, UnknownKind};

use crate::circuit::Circuit;
use crate::devices::{Device, Method, Mna, Mode, SolveContext};
use crate::waveform::Waveform;

/// Tolerances and step limits of a run.
#[derive(Clone, Debug, PartialEq)]
pub struct Settings {
    /// Largest step, seconds. Default 500 us (at least 40 steps per 50 Hz cycle; the
    /// truncation-error control takes shorter steps wherever the waveforms need them).
    pub max_step_s: f64,
    /// Smallest step before the run gives up, seconds. Default 1e-12 s.
    pub min_step_s: f64,
    /// First step after a breakpoint or discrete event, seconds. Default 1 us.
    pub restart_step_s: f64,
    /// Newton relative tolerance on every unknown. Default 1e-4.
    pub reltol: f64,
    /// Newton absolute tolerance on node voltages, volts. Default 1 uV.
    pub voltage_abstol: f64,
    /// Newton absolute tolerance on branch currents, amperes. Default 1 nA.
    pub current_abstol: f64,
    /// Relative local-truncation-error tolerance per step. Default 7e-5: keeps the period of
    /// a ringing LC circuit, a first-order lag's timing and a transformer's magnetizing
    /// current within 0.1% (`docs/engine.md`).
    pub lte_reltol: f64,
    /// Absolute local-truncation-error tolerance on capacitor voltages, volts. Default 5 uV.
    pub lte_voltage_abstol: f64,
    /// Absolute local-truncation-error tolerance on inductor currents, amperes. Default 1 uA.
    pub lte_current_abstol: f64,
    /// Newton iterations allowed per time step. Default 50.
    pub max_newton_iterations: usize,
    /// Newton iterations allowed per operating-point attempt. Default 200.
    pub max_operating_point_iterations: usize,
    /// Discrete state changes are located to within this, seconds. Default 1 us.
    pub event_tolerance_s: f64,
    /// Conductance across every junction and from every node to ground, siemens.
    /// Default 1e-12 S.
    pub gmin: f64,
    /// A junction or transistor counts as conducting above this current, amperes.
    /// Default 10 uA.
    pub corner_current_a: f64,
    /// A step in which a device changes operating region (a junction starts or stops
    /// conducting, a comparator switches, a regulator enters dropout) is shortened to this
    /// and integration restarts after it, seconds; 0 turns corner handling off.
    /// Default 20 us.
    pub corner_step_s: f64,
}

impl Default for Settings {
    fn default() -> Self {
        Self {
            max_step_s: 500e-6,
            min_step_s: 1e-12,
            restart_step_s: 1e-6,
            reltol: 1e-4,
            voltage_abstol: 1e-6,
            current_abstol: 1e-9,
            lte_reltol: 7e-5,
            lte_voltage_abstol: 5e-6,
            lte_current_abstol: 1e-6,
            max_newton_iterations: 50,
            max_operating_point_iterations: 200,
            event_tolerance_s: 1e-6,
            gmin: 1e-12,
            corner_current_a: 10e-6,
            corner_step_s: 20e-6,
        }
    }
}

/// How a run begins.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Start {
    /// The operating point with the sources at their t = 0 values.
    OperatingPoint,
    /// From rest: capacitors at their `initial_voltage` (default 0), inductors at their
    /// `initial_current` (default 0), as when a unit is first plugged in.
    Rest,
}

/// Counters that explain a run's cost.
#[derive(Clone, Copy, Debug, Default, PartialEq, serde::Serialize)]
pub struct RunStats {
    /// Accepted time steps.
    pub accepted_steps: u64,
    /// Steps rejected by the truncation-error test.
    pub rejected_steps: u64,
    /// Steps whose Newton iteration failed (then retried shorter).
    pub newton_failures: u64,
    /// Newton iterations in all.
    pub newton_iterations: u64,
    /// Matrix factorisations.
    pub factorizations: u64,
    /// Factorisations that had to choose a new pivot order.
    pub reorders: u64,
    /// Operating-point solves made by gmin stepping or source stepping (0 when plain
    /// Newton found it).
    pub stepping_solves: u64,
    /// Simulated time skipped over in periodic steady state (see `SimState::skip_ahead`),
    /// seconds.
    pub skipped_s: f64,
    /// Breakpoints and discrete events after which integration restarted.
    pub restarts: u64,
    /// Discrete state changes located in time.
    pub located_events: u64,
}

/// A discrete state change.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum EventKind {
    /// A voltage-controlled switch closed.
    SwitchClosed,
    /// A voltage-controlled switch opened.
    SwitchOpened,
    /// A relay armature picked up (coil current rose through the pick-up current).
    PickUp,
    /// A relay armature dropped out (coil current fell through the drop-out current).
    DropOut,
    /// A relay's normally-open contact made (closed).
    NormallyOpenMade,
    /// A relay's normally-open contact broke (opened).
    NormallyOpenBroken,
    /// A relay's normally-closed contact made.
    NormallyClosedMade,
    /// A relay's normally-closed contact broke.
    NormallyClosedBroken,
    /// A timer's flip-flop set (output high).
    TimerSet,
    /// A timer's flip-flop reset (output low).
    TimerReset,
}

/// A contact change a relay schedules after an armature movement.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum ContactAction {
    /// Close common to normally-open.
    MakeNormallyOpen,
    /// Open common to normally-open.
    BreakNormallyOpen,
    /// Close common to normally-closed.
    MakeNormallyClosed,
    /// Open common to normally-closed.
    BreakNormallyClosed,
}

/// A discrete change scheduled for a later instant (a breakpoint the stepper lands on).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Scheduled {
    /// When, seconds.
    pub time: f64,
    /// The device it belongs to.
    pub device: usize,
    /// What happens.
    pub action: ContactAction,
}

/// Scheduled changes a state can hold without allocating.
const PENDING_CAPACITY: usize = 256;

/// A discrete event with its exact time.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct DiscreteEvent {
    /// When it happened, seconds (located to within [`Settings::event_tolerance_s`]).
    pub time: f64,
    /// Index of the part.
    pub part: usize,
    /// What happened.
    pub kind: EventKind,
}

/// Receives accepted steps and discrete events. `()` ignores both.
pub trait Observer {
    /// Called after each accepted step (and once for the initial state by
    /// [`Simulator::start`] callers that want it).
    fn step(&mut self, _network: &Network, _state: &SimState) {}
    /// Called when a device changes its discrete state.
    fn event(&mut self, _network: &Network, _event: &DiscreteEvent) {}
}

impl Observer for () {}

/// Why a run stopped early.
#[derive(Clone, Debug, PartialEq, thiserror::Error)]
pub enum SimError {
    /// Newton-Raphson did not converge even at the smallest step.
    #[error("no convergence at t = {time_s:.9} s (step {step_s:.3e} s); unknowns not settling: {}; involved: {}", unknowns.join(", "), involved.join(", "))]
    NoConvergence {
        /// Time being solved for, seconds.
        time_s: f64,
        /// Last step tried, seconds.
        step_s: f64,
        /// Names of the unknowns that moved most in the last iteration.
        unknowns: Vec<String>,
        /// Parts and nodes involved.
        involved: Vec<String>,
    },
    /// The circuit leaves an unknown undetermined.
    #[error("singular circuit matrix at t = {time_s:.9} s: {owner} (unknown `{unknown}`) is not determined by the circuit; check for a floating node or a loop of sources")]
    Singular {
        /// Time being solved for, seconds.
        time_s: f64,
        /// Name of the unknown.
        unknown: String,
        /// The node or part it belongs to.
        owner: String,
    },
    /// A waveform was given to a part that is not a source.
    #[error("part `{0}` is not a voltage or current source")]
    NotASource(String),
    /// The operating point could not be found by plain Newton, gmin stepping or source
    /// stepping.
    #[error("no operating point: plain Newton, gmin stepping and source stepping all failed; last failure: {0}")]
    OperatingPoint(Box<SimError>),
}

/// The evolving state of a run: one cloneable value.
#[derive(Clone, Debug)]
pub struct SimState {
    /// Present time, seconds.
    pub time: f64,
    x: Vec<f64>,
    hist: Vec<f64>,
    modes: Vec<Mode>,
    /// Scheduled discrete changes, in the order they were scheduled.
    pending: Vec<Scheduled>,
    /// Two earlier solutions, most recent first, for the truncation-error estimate.
    past_x: Vec<f64>,
    past_t: [f64; 2],
    /// Accepted points since the last breakpoint, counting the breakpoint itself.
    points_since_break: usize,
    /// Proposed length of the next step, seconds.
    step: f64,
    /// The last attempted step was rejected by the truncation-error test.
    just_rejected: bool,
    /// The step being tried ends just before a device's corner: the next one is
    /// `corner_step_s` long, through it.
    corner_ahead: bool,
    /// Counters since the state was created.
    pub stats: RunStats,
}

impl SimState {
    /// The solution vector (index 0 is the reference node, always 0).
    pub fn solution(&self) -> &[f64] {
        &self.x
    }

    /// Voltage of node `node` (circuit node index), volts.
    pub fn node_voltage(&self, node: usize) -> f64 {
        self.x[node]
    }

    /// Discrete mode of device `device`.
    pub fn mode(&self, device: usize) -> Mode {
        self.modes[device]
    }

    /// Discrete changes scheduled for later instants.
    pub fn pending(&self) -> &[Scheduled] {
        &self.pending
    }

    /// Moves the clock forward by `dt` without integrating: the state stands for the same
    /// point of the waveform `dt` later. Valid only when the circuit is in a periodic steady
    /// state whose period divides `dt`, its sources repeat over `dt`, and nothing is
    /// pending; the caller checks all three.
    pub fn skip_ahead(&mut self, dt: f64) {
        debug_assert!(self.pending.is_empty());
        self.time += dt;
        self.past_t[0] += dt;
        self.past_t[1] += dt;
        self.stats.skipped_s += dt;
    }
}

/// The structural pattern of a network's matrix: every entry any device can touch, found
/// by one assembly pass that marks instead of adding.
fn structure(network: &Network) -> Vec<bool> {
    let dim = network.dim();
    let mut a = vec![0.0; dim * dim];
    let mut b = vec![0.0; dim];
    let mut scratch = vec![0.0; network.scratch_len];
    let hist = vec![0.0; network.history_len];
    let x = vec![0.0; dim];
    let ctx = SolveContext {
        time: 0.0,
        h: 1e-6,
        method: Method::Trapezoidal,
        source_scale: 1.0,
        gmin: 1e-12,
        shunt: 1e-12,
        left_limit: false,
    };
    let mut m = Mna {
        dim,
        a: &mut a,
        b: &mut b,
        structural: true,
    };
    for d in &network.devices {
        d.stamp(&mut m, &ctx, &x, &hist, d.initial_mode(), &mut scratch);
    }
    a.iter().map(|&v| v != 0.0).collect()
}

/// A solved node voltage (V) or branch current (A) beyond this is taken as undetermined.
const IMPLAUSIBLE: f64 = 1e9;

/// An interval shorter than this fraction of the event tolerance is crossed without a
/// solve (see `Simulator::advance`).
const NEGLIGIBLE_FRACTION: f64 = 1e-3;

/// How many ulps of a matrix row's largest term count as its rounding level.
const ROUNDING_ULPS: f64 = 16.0;

/// Why one Newton solve failed.
enum NewtonFailure {
    Diverged,
    Singular(usize),
}

/// Scratch buffers, allocated once per simulator.
#[derive(Clone, Debug)]
struct Workspace {
    a: Vec<f64>,
    b: Vec<f64>,
    lu: SparseLu,
    work: Vec<f64>,
    /// Newton iterate; holds the solution after a successful solve.
    x_sol: Vec<f64>,
    x_next: Vec<f64>,
    /// Solution kept while locating a discrete event.
    x_keep: Vec<f64>,
    /// A point on the straight line between two solutions (corner interpolation).
    x_line: Vec<f64>,
    scratch: Vec<f64>,
    /// Per-unknown normalised update of the last iteration (for failure messages).
    update: Vec<f64>,
    /// Copy of the assembled matrix, kept after the first iterations for the residual test.
    a_copy: Vec<f64>,
}

/// A compiled circuit with its solver workspace.
#[derive(Clone, Debug)]
pub struct Simulator {
    network: Network,
    settings: Settings,
    ws: Workspace,
}

impl Simulator {
    /// Compiles `circuit` for simulation with `settings`.
    ///
    /// ```
    /// use sagtrip::engine::{Settings, Simulator, Start};
    /// let text = "[part.v]\nkind = \"voltage-source\"\npins = [\"a\", \"gnd\"]\ndc = 10\n\
    ///             [part.r1]\nkind = \"resistor\"\npins = [\"a\", \"b\"]\nresistance = \"1k\"\n\
    ///             [part.r2]\nkind = \"resistor\"\npins = [\"b\", \"gnd\"]\nresistance = \"3k\"\n";
    /// let circuit = sagtrip::circuit_file::parse_circuit(text, "divider.toml").unwrap();
    /// let mut sim = Simulator::new(&circuit, Settings::default());
    /// let mut state = sim.start(Start::OperatingPoint).unwrap();
    /// sim.advance(&mut state, 1e-3, &mut ()).unwrap();
    /// let b = circuit.node("b").unwrap();
    /// // 7.5 V less the microvolt-scale load of the 1e-12 S node shunts.
    /// assert!((state.node_voltage(b) - 7.5).abs() < 1e-6);
    /// ```
    pub fn new(circuit: &Circuit, settings: Settings) -> Self {
        let network = Network::new(circuit);
        let dim = network.dim();
        let pattern = structure(&network);
        let ws = Workspace {
            a: vec![0.0; dim * dim],
            b: vec![0.0; dim],
            lu: SparseLu::new(dim, &pattern),
            work: vec![0.0; dim],
            x_sol: vec![0.0; dim],
            x_next: vec![0.0; dim],
            x_keep: vec![0.0; dim],
            x_line: vec![0.0; dim],
            scratch: vec![0.0; network.scratch_len],
            update: vec![0.0; dim],
            a_copy: vec![0.0; dim * dim],
        };
        Self {
            network,
            settings,
            ws,
        }
    }

    /// The compiled network.
    pub fn network(&self) -> &Network {
        &self.network
    }

    /// The settings in force.
    pub fn settings(&self) -> &Settings {
        &self.settings
    }

    /// Changes the largest step (for example to follow a recording's sample spacing).
    pub fn set_max_step(&mut self, max_step_s: f64) {
        self.settings.max_step_s = max_step_s;
    }

    fn empty_state(&self) -> SimState {
        let dim = self.network.dim();
        SimState {
            time: 0.0,
            x: vec![0.0; dim],
            hist: vec![0.0; self.network.history_len],
            modes: self
                .network
                .devices
                .iter()
                .map(|d| d.initial_mode())
                .collect(),
            pending: Vec::with_capacity(PENDING_CAPACITY),
            past_x: vec![0.0; 2 * dim],
            past_t: [0.0; 2],
            points_since_break: 1,
            step: self.settings.restart_step_s,
            just_rejected: false,
            corner_ahead: false,
            stats: RunStats::default(),
        }
    }

    /// The state at t = 0, either the operating point or at rest.
    pub fn start(&mut self, start: Start) -> Result<SimState, SimError> {
        let mut state = self.empty_state();
        match start {
            Start::OperatingPoint => {
                self.operating_point(&mut state)?;
                for d in &self.network.devices {
                    d.steady_history(&state.x, &mut state.hist);
                }
            }
            Start::Rest => {
                for d in &self.network.devices {
                    d.rest_history(&mut state.hist);
                }
                // A very short backward-Euler step pins capacitor voltages and inductor
                // currents at their initial values and finds every other unknown.
                let ctx = self.context(0.0, 1e-9, Method::BackwardEuler);
                self.newton(
                    &mut state,
                    &ctx,
                    self.settings.max_operating_point_iterations,
                    false,
                )
                .map_err(|f| self.failure(f, &ctx))?;
                state.x.copy_from_slice(&self.ws.x_sol);
            }
        }
        Ok(state)
    }

    fn context(&self, time: f64, h: f64, method: Method) -> SolveContext {
        SolveContext {
            time,
            h,
            method,
            source_scale: 1.0,
            gmin: self.settings.gmin,
            shunt: self.settings.gmin,
            left_limit: false,
        }
    }

    /// Finds the operating point: plain Newton, then gmin stepping, then source stepping.
    fn operating_point(&mut self, state: &mut SimState) -> Result<(), SimError> {
        let iterations = self.settings.max_operating_point_iterations;
        let mut ctx = self.context(state.time, 0.0, Method::OperatingPoint);
        state.x.iter_mut().for_each(|v| *v = 0.0);
        if self.newton(state, &ctx, iterations, false).is_ok() {
            state.x.copy_from_slice(&self.ws.x_sol);
            return Ok(());
        }
        // gmin stepping: a large shunt on every node, reduced a decade at a time.
        let mut gmin_ok = true;
        state.x.iter_mut().for_each(|v| *v = 0.0);
        for exponent in 2..=12 {
            state.stats.stepping_solves += 1;
            ctx.shunt = 10f64.powi(-exponent).max(self.settings.gmin);
            if self.newton(state, &ctx, iterations, true).is_err() {
                gmin_ok = false;
                break;
            }
            state.x.copy_from_slice(&self.ws.x_sol);
        }
        if gmin_ok {
            ctx.shunt = self.settings.gmin;
            if self.newton(state, &ctx, iterations, true).is_ok() {
                state.x.copy_from_slice(&self.ws.x_sol);
                return Ok(());
            }
        }
        // Source stepping: ramp every source from 0 to its value.
        ctx.shunt = self.settings.gmin;
        state.x.iter_mut().for_each(|v| *v = 0.0);
        let mut scale: f64 = 0.0;
        let mut increment: f64 = 0.1;
        while scale < 1.0 {
            let target = (scale + increment).min(1.0);
            ctx.source_scale = target;
            state.stats.stepping_solves += 1;
            match self.newton(state, &ctx, iterations, true) {
                Ok(()) => {
                    state.x.copy_from_slice(&self.ws.x_sol);
                    scale = target;
                    increment *= 1.5;
                }
                Err(f) => {
                    increment /= 4.0;
                    if increment < 1e-6 {
                        return Err(SimError::OperatingPoint(Box::new(self.failure(f, &ctx))));
                    }
                }
            }
        }
        Ok(())
    }

    /// Assembles the linearised system at `x` into the workspace.
    fn assemble(&mut self, ctx: &SolveContext, hist: &[f64], modes: &[Mode], x_is_next: bool) {
        let ws = &mut self.ws;
        for &k in ws.lu.entries() {
            ws.a[k] = 0.0;
        }
        ws.b.iter_mut().for_each(|v| *v = 0.0);
        let dim = self.network.dim();
        let x = if x_is_next { &ws.x_next } else { &ws.x_sol };
        let mut m = Mna {
            dim,
            a: &mut ws.a,
            b: &mut ws.b,
            structural: false,
        };
        for (i, d) in self.network.devices.iter().enumerate() {
            d.stamp(&mut m, ctx, x, hist, modes[i], &mut ws.scratch);
        }
        for i in 1..self.network.circuit.nodes.len() {
            ws.a[i * dim + i] += ctx.shunt;
        }
    }

    /// Newton-Raphson for one instant. The starting guess is `state.x` (or, with
    /// `from_sol`, the workspace's present solution); the result is left in `ws.x_sol`.
    fn newton(
        &mut self,
        state: &mut SimState,
        ctx: &SolveContext,
        max_iterations: usize,
        from_sol: bool,
    ) -> Result<(), NewtonFailure> {
        if !from_sol {
            self.ws.x_sol.copy_from_slice(&state.x);
        }
        self.newton_from_guess(state, ctx, max_iterations)
    }

    fn newton_from_guess(
        &mut self,
        state: &mut SimState,
        ctx: &SolveContext,
        max_iterations: usize,
    ) -> Result<(), NewtonFailure> {
        // Junction limiting is anchored at the last accepted solution, not at the
        // extrapolated guess, so a predictor overshoot cannot start a junction far forward.
        for d in &self.network.devices {
            d.begin_newton(&state.x, &self.ws.x_sol, &mut self.ws.scratch);
        }
        let node_count = self.network.circuit.nodes.len();
        let dim = self.network.dim();
        for iteration in 0..max_iterations {
            self.assemble(ctx, &state.hist, &state.modes, false);
            state.stats.newton_iterations += 1;
            state.stats.factorizations += 1;
            let keep_matrix = iteration >= 2;
            if keep_matrix {
                self.ws.a_copy.copy_from_slice(&self.ws.a);
            }
            if self.ws.lu.refactor(&mut self.ws.a).is_err() {
                // The kept pivot order no longer suits the values: assemble again (the
                // failed attempt overwrote part of the matrix) and choose a new order.
                self.assemble(ctx, &state.hist, &state.modes, false);
                state.stats.reorders += 1;
                if let Err(Singular { unknown }) = self.ws.lu.factor_choosing_order(&mut self.ws.a)
                {
                    return Err(NewtonFailure::Singular(unknown));
                }
            }
            let ws = &mut self.ws;
            ws.x_next.copy_from_slice(&ws.b);
            ws.lu.solve(&ws.a, &mut ws.x_next, &mut ws.work);
            if !self.network.nonlinear {
                std::mem::swap(&mut ws.x_sol, &mut ws.x_next);
                return Ok(());
            }
            let mut converged = true;
            for i in 1..dim {
                let (new, old) = (ws.x_next[i], ws.x_sol[i]);
                if !new.is_finite() {
                    return Err(NewtonFailure::Diverged);
                }
                let abstol = if i < node_count {
                    self.settings.voltage_abstol
                } else {
                    self.settings.current_abstol
                };
                let allowed = self.settings.reltol * new.abs().max(old.abs()) + abstol;
                ws.update[i] = (new - old).abs() / allowed;
                if ws.update[i] > 1.0 {
                    converged = false;
                }
            }
            // Residual test: a node held only by tiny conductances (a transformer winding
            // floating behind reverse-biased diodes) has its voltage set by picoamperes and
            // its update never settles below the voltage tolerance in floating point. When
            // the update implies only negligible currents (A dx small), the previous iterate
            // already satisfied the circuit equations.
            // A row's terms are only known to its rounding level (a few ulps of its largest
            // term): over a very short step a reservoir capacitor's companion 2C/h makes
            // that level larger than any current tolerance, and a residual below it says
            // nothing more.
            if !converged && keep_matrix {
                converged = (1..dim).all(|i| {
                    let row = &ws.a_copy[i * dim..(i + 1) * dim];
                    let mut r = 0.0;
                    let mut scale = ws.b[i].abs();
                    for ((a, next), old) in row.iter().zip(&ws.x_next).zip(&ws.x_sol).skip(1) {
                        r += a * (next - old);
                        scale = scale.max((a * old).abs());
                    }
                    let tol = if i < node_count {
                        self.settings.current_abstol
                    } else {
                        self.settings.voltage_abstol
                    };
                    r.abs() <= tol + ROUNDING_ULPS * f64::EPSILON * scale
                });
            }
            if converged {
                converged = self.network.devices.iter().all(|d| {
                    d.converged(
                        &ws.x_next,
                        &ws.scratch,
                        ctx.gmin,
                        self.settings.reltol,
                        self.settings.current_abstol,
                    )
                });
            }
            std::mem::swap(&mut ws.x_sol, &mut ws.x_next);
            if converged {
                // A node voltage or branch current beyond any physical value means the
                // circuit leaves it undetermined (held only by gmin).
                if let Some(i) = (1..dim).find(|&i| ws.x_sol[i].abs() > IMPLAUSIBLE) {
                    return Err(NewtonFailure::Singular(i));
                }
                return Ok(());
            }
        }
        Err(NewtonFailure::Diverged)
    }

    /// Turns a Newton failure into an error naming the unknowns, nodes and parts.
    fn failure(&self, failure: NewtonFailure, ctx: &SolveContext) -> SimError {
        match failure {
            NewtonFailure::Singular(unknown) => SimError::Singular {
                time_s: ctx.time,
                unknown: self.network.unknown_name(unknown).to_string(),
                owner: self.network.unknown_owner(unknown),
            },
            NewtonFailure::Diverged => {
                let mut worst: Vec<usize> = (1..self.network.dim()).collect();
                worst.sort_by(|&a, &b| self.ws.update[b].total_cmp(&self.ws.update[a]));
                worst.truncate(3);
                let unknowns = worst
                    .iter()
                    .map(|&i| self.network.unknown_name(i).to_string())
                    .collect();
                let mut involved: Vec<String> = worst
                    .iter()
                    .map(|&i| self.network.unknown_owner(i))
                    .collect();
                // Parts attached to the worst nodes.
                for &i in &worst {
                    if let UnknownKind::Node(n) = self.network.unknowns[i].1 {
                        for part in &self.network.circuit.parts {
                            if part.pins.contains(&n) {
                                let name = format!("part `{}`", part.name);
                                if !involved.contains(&name) {
                                    involved.push(name);
                                }
                            }
                        }
                    }
                }
                SimError::NoConvergence {
                    time_s: ctx.time,
                    step_s: ctx.h,
                    unknowns,
                    involved,
                }
            }
        }
    }

    /// Solves one step of length `h` from `state` into `ws.x_sol`, starting from a linear
    /// extrapolation of the last two points.
    fn solve_step(
        &mut self,
        state: &mut SimState,
        h: f64,
        method: Method,
        left_limit: bool,
    ) -> Result<(), NewtonFailure> {
        let mut ctx = self.context(state.time + h, h, method);
        ctx.left_limit = left_limit;
        let ws = &mut self.ws;
        if state.points_since_break >= 2 && self.network.nonlinear {
            let dt_past = state.time - state.past_t[0];
            let r = h / dt_past;
            let dim = state.x.len();
            for i in 0..dim {
                ws.x_sol[i] = state.x[i] + r * (state.x[i] - state.past_x[i]);
            }
        } else {
            ws.x_sol.copy_from_slice(&state.x);
        }
        self.newton_from_guess(state, &ctx, self.settings.max_newton_iterations)
    }

    /// Ratio of the estimated local truncation error of the step to its tolerance.
    fn truncation_error(&self, state: &SimState, h: f64) -> f64 {
        let dim = state.x.len();
        let (x3, x2) = (&self.ws.x_sol, &state.x);
        let (x1, x0) = (&state.past_x[..dim], &state.past_x[dim..]);
        let t2 = state.time;
        let t3 = t2 + h;
        let (t1, t0) = (state.past_t[0], state.past_t[1]);
        let s = &self.settings;
        let mut worst = 0.0_f64;
        for &(p, q, is_current) in &self.network.error_probes {
            let value = |x: &[f64]| if is_current { x[p] } else { x[p] - x[q] };
            let (v0, v1, v2, v3) = (value(x0), value(x1), value(x2), value(x3));
            let d01 = (v1 - v0) / (t1 - t0);
            let d12 = (v2 - v1) / (t2 - t1);
            let d23 = (v3 - v2) / (t3 - t2);
            let d012 = (d12 - d01) / (t2 - t0);
            let d123 = (d23 - d12) / (t3 - t1);
            let d0123 = (d123 - d012) / (t3 - t0);
            // Trapezoidal rule: LTE = h^3 x''' / 12, with x''' ~ 6 x[t0..t3].
            let lte = 0.5 * h * h * h * d0123.abs();
            let abstol = if is_current {
                s.lte_current_abstol
            } else {
                s.lte_voltage_abstol
            };
            let tol = s.lte_reltol * v3.abs().max(v2.abs()) + abstol;
            worst = worst.max(lte / tol);
        }
        let ctx = self.context(t3, h, Method::Trapezoidal);
        for d in &self.network.devices {
            if let Some((lte, magnitude, abstol)) = d.derivative_error(
                &ctx,
                x3,
                &state.hist,
                t2 - t1,
                s.lte_voltage_abstol,
                s.lte_current_abstol,
            ) {
                worst = worst.max(lte / (s.lte_reltol * magnitude + abstol));
            }
        }
        worst
    }

    /// Makes `ws.x_sol` the state at `time + h`.
    fn commit(&mut self, state: &mut SimState, h: f64, method: Method, new_time: f64) {
        let ctx = self.context(new_time, h, method);
        for d in &self.network.devices {
            d.commit(&ctx, &self.ws.x_sol, &mut state.hist);
        }
        let dim = state.x.len();
        state.past_x.copy_within(0..dim, dim);
        state.past_x[..dim].copy_from_slice(&state.x);
        state.past_t[1] = state.past_t[0];
        state.past_t[0] = state.time;
        state.x.copy_from_slice(&self.ws.x_sol);
        state.time = new_time;
        state.points_since_break += 1;
        state.stats.accepted_steps += 1;
    }

    /// Restarts integration after a discontinuity: damped first step, short step.
    fn restart(&self, state: &mut SimState) {
        state.points_since_break = 1;
        state.step = self.settings.restart_step_s;
        state.stats.restarts += 1;
    }

    /// Whether any device changed operating region between the state and the solution in
    /// the workspace (see `Device::regime`).
    fn region_changed(&self, state: &SimState) -> bool {
        let on = self.settings.corner_current_a;
        self.network.regime_devices.iter().any(|&d| {
            let device = &self.network.devices[d];
            device.regime(&state.x, on) != device.regime(&self.ws.x_sol, on)
        })
    }

    /// Where, as a fraction of the step, the first device changes region, on the straight
    /// line from the state to the solution in the workspace (bisection to 1/1024 of the
    /// step; the last fraction known to be before the change).
    fn corner_fraction(&mut self, state: &SimState) -> f64 {
        let on = self.settings.corner_current_a;
        let (mut before, mut after) = (0.0, 1.0);
        for _ in 0..10 {
            let mid = 0.5 * (before + after);
            for ((p, a), b) in self.ws.x_line.iter_mut().zip(&state.x).zip(&self.ws.x_sol) {
                *p = a + mid * (b - a);
            }
            let network = &self.network;
            let changed = network.regime_devices.iter().any(|&d| {
                let device = &network.devices[d];
                device.regime(&state.x, on) != device.regime(&self.ws.x_line, on)
            });
            if changed {
                after = mid;
            } else {
                before = mid;
            }
        }
        before
    }

    /// The largest crossing function over the discrete devices at `x`.
    fn crossing(&self, x: &[f64], modes: &[Mode]) -> f64 {
        self.network
            .discrete_devices
            .iter()
            .filter_map(|&d| self.network.devices[d].crossing(x, modes[d]))
            .fold(f64::NEG_INFINITY, f64::max)
    }

    /// Changes the mode of every device whose crossing function is positive at the present
    /// state; returns whether any changed.
    fn apply_crossings<O: Observer + ?Sized>(
        &self,
        state: &mut SimState,
        observer: &mut O,
    ) -> bool {
        let mut any = false;
        for &d in &self.network.discrete_devices {
            let device = &self.network.devices[d];
            if device.crossing(&state.x, state.modes[d]).unwrap_or(0.0) > 0.0 {
                if let Some(kind) =
                    device.cross(d, state.time, &mut state.modes[d], &mut state.pending)
                {
                    any = true;
                    observer.event(
                        &self.network,
                        &DiscreteEvent {
                            time: state.time,
                            part: self.network.device_part[d],
                            kind,
                        },
                    );
                }
            }
        }
        any | self.apply_due(state, observer)
    }

    /// Applies every scheduled change due at or before the present time, in order;
    /// returns whether any was.
    fn apply_due<O: Observer + ?Sized>(&self, state: &mut SimState, observer: &mut O) -> bool {
        let now = state.time + 1e-13 * state.time.abs().max(1e-6);
        let mut any = false;
        let mut k = 0;
        while k < state.pending.len() {
            let s = state.pending[k];
            if s.time <= now {
                state.pending.remove(k);
                let device = &self.network.devices[s.device];
                if let Some(kind) = device.apply_scheduled(s.action, &mut state.modes[s.device]) {
                    any = true;
                    observer.event(
                        &self.network,
                        &DiscreteEvent {
                            time: state.time,
                            part: self.network.device_part[s.device],
                            kind,
                        },
                    );
                }
            } else {
                k += 1;
            }
        }
        any
    }

    /// Locates the first instant in the step where a crossing function turns positive
    /// (Illinois false position), leaving that solution in `ws.x_sol`; returns the step.
    fn locate(
        &mut self,
        state: &mut SimState,
        h: f64,
        method: Method,
    ) -> Result<f64, NewtonFailure> {
        let (mut ta, mut fa) = (0.0, self.crossing(&state.x, &state.modes).min(0.0));
        let (mut tb, mut fb) = (h, self.crossing(&self.ws.x_sol, &state.modes));
        self.ws.x_keep.copy_from_slice(&self.ws.x_sol);
        let mut side = 0;
        while tb - ta > self.settings.event_tolerance_s {
            let width = tb - ta;
            let mut tm = ta + width * (-fa) / (fb - fa);
            if !tm.is_finite() {
                tm = ta + 0.5 * width;
            }
            tm = tm.clamp(ta + 0.01 * width, tb - 0.01 * width);
            // Avoid creeping from one side: finish with a bisection-sized bracket.
            if width < 4.0 * self.settings.event_tolerance_s {
                tm = ta + 0.5 * width;
            }
            self.solve_step(state, tm, method, false)?;
            let fm = self.crossing(&self.ws.x_sol, &state.modes);
            if fm > 0.0 {
                tb = tm;
                fb = fm;
                self.ws.x_keep.copy_from_slice(&self.ws.x_sol);
                if side == -1 {
                    fa *= 0.5;
                }
                side = -1;
            } else {
                ta = tm;
                fa = fm;
                if side == 1 {
                    fb *= 0.5;
                }
                side = 1;
            }
        }
        self.ws.x_sol.copy_from_slice(&self.ws.x_keep);
        state.stats.located_events += 1;
        Ok(tb)
    }

    /// The next instant after the state's time where a source is not smooth or a
    /// scheduled change is due.
    fn next_breakpoint(&self, state: &SimState) -> f64 {
        let t = state.time;
        let eps = 1e-14 * t.abs().max(1e-3);
        let sources = self
            .network
            .devices
            .iter()
            .map(|d| d.next_breakpoint(t + eps))
            .fold(f64::INFINITY, f64::min);
        state
            .pending
            .iter()
            .map(|s| s.time)
            .filter(|&time| time > t + eps)
            .fold(sources, f64::min)
    }

    /// Integrates `state` forward to `t_end`, reporting to `observer`.
    pub fn advance<O: Observer + ?Sized>(
        &mut self,
        state: &mut SimState,
        t_end: f64,
        observer: &mut O,
    ) -> Result<(), SimError> {
        let time_eps = |t: f64| 1e-13 * t.abs().max(1e-6);
        let mut cascade = 0;
        while t_end - state.time > time_eps(t_end) {
            if !self.network.discrete_devices.is_empty() {
                if self.apply_crossings(state, observer) && cascade < 64 {
                    cascade += 1;
                    self.restart(state);
                    continue;
                }
                cascade = 0;
            }
            let breakpoint = self.next_breakpoint(state);
            let stop = t_end.min(breakpoint);
            let method = if state.points_since_break <= 1 {
                Method::BackwardEuler
            } else {
                Method::Trapezoidal
            };
            let remaining = stop - state.time;
            if remaining < self.settings.event_tolerance_s * NEGLIGIBLE_FRACTION {
                // A sliver of time left by rounding (a caller's stopping time a few ulps
                // before a breakpoint): too short to solve, since companion conductances
                // like 2C/h then amplify rounding beyond any current tolerance, and too
                // short to matter. Cross it without a solve.
                state.time = stop;
                if stop == breakpoint {
                    self.apply_due(state, observer);
                    self.restart(state);
                }
                continue;
            }
            let mut h = state.step.min(self.settings.max_step_s);
            let mut lands = false;
            if h >= remaining * (1.0 - 1e-9) {
                h = remaining;
                lands = true;
            } else if h > 0.5 * remaining {
                h = 0.5 * remaining;
            }

            let at_breakpoint = lands && stop == breakpoint;
            if let Err(f) = self.solve_step(state, h, method, at_breakpoint) {
                state.stats.newton_failures += 1;
                if matches!(f, NewtonFailure::Singular(_)) || h / 8.0 < self.settings.min_step_s {
                    let ctx = self.context(state.time + h, h, method);
                    return Err(self.failure(f, &ctx));
                }
                state.step = h / 8.0;
                continue;
            }

            // Before the error estimate is available (just after a restart) grow fast: the
            // restart step is deliberately tiny.
            let mut growth = if h < self.settings.corner_step_s {
                4.0
            } else {
                2.0
            };
            if method == Method::Trapezoidal && state.points_since_break >= 3 {
                let err = self.truncation_error(state, h);
                let factor = 0.9 * err.max(1e-12).powf(-1.0 / 3.0);
                if err > 1.0 {
                    state.stats.rejected_steps += 1;
                    state.just_rejected = true;
                    state.step = h * factor.clamp(0.1, 0.5);
                    if state.step < self.settings.min_step_s {
                        let ctx = self.context(state.time + h, h, method);
                        return Err(self.failure(NewtonFailure::Diverged, &ctx));
                    }
                    continue;
                }
                // Right after a rejection the estimate is least trusted: do not grow.
                growth = factor.min(if state.just_rejected { 1.0 } else { 2.0 });
                state.just_rejected = false;
            }

            // A device changing region inside a long step: shorten the step around the corner.
            let corner = self.settings.corner_step_s > 0.0 && self.region_changed(state);
            if corner && h > self.settings.corner_step_s * (1.0 + 1e-9) {
                state.stats.rejected_steps += 1;
                state.just_rejected = true;
                // Step to just before the corner (located on the straight line between the
                // two solutions), then through it with a corner-length step.
                let corner_step = self.settings.corner_step_s;
                let before = self.corner_fraction(state) * h - 0.5 * corner_step;
                if before > corner_step {
                    state.step = before;
                    state.corner_ahead = true;
                } else {
                    state.step = corner_step;
                    state.corner_ahead = false;
                }
                continue;
            }

            let mut transition = false;
            if !self.network.discrete_devices.is_empty()
                && self.crossing(&self.ws.x_sol, &state.modes) > 0.0
            {
                h = match self.locate(state, h, method) {
                    Ok(h) => h,
                    Err(f) => {
                        let ctx = self.context(state.time + h, h, method);
                        return Err(self.failure(f, &ctx));
                    }
                };
                lands = false;
                transition = true;
            }

            let new_time = if lands { stop } else { state.time + h };
            self.commit(state, h, method, new_time);
            observer.step(&self.network, state);

            if transition {
                self.apply_crossings(state, observer);
                self.restart(state);
            } else if lands && stop == breakpoint {
                self.apply_due(state, observer);
                self.restart(state);
            } else if corner {
                // Restart with a damped step so the trapezoidal rule does not carry the
                // pre-corner current across it.
                state.points_since_break = 1;
                state.step = self.settings.corner_step_s;
                state.stats.restarts += 1;
            } else if state.corner_ahead {
                state.step = self.settings.corner_step_s;
            } else {
                state.step = h * growth;
            }
            state.corner_ahead = false;
        }
        Ok(())
    }

    /// Current into the first pin of part `part` at the state, amperes.
    pub fn part_current(&self, state: &SimState, part: usize) -> f64 {
        self.network.part_current(state, part)
    }

    /// Replaces the waveform of source part `part` (a voltage or current source). The
    /// state is unaffected: a run continues with the new waveform from its present time, so
    /// a waveform that agrees with the old one up to then joins without a step.
    pub fn set_source_waveform(&mut self, part: usize, waveform: Waveform) -> Result<(), SimError> {
        let mut found = false;
        for &(d, _) in &self.network.part_devices[part] {
            if let Device::VoltageSource { waveform: w, .. }
            | Device::CurrentSource { waveform: w, .. } = &mut self.network.devices[d]
            {
                *w = waveform.clone();
                found = true;
            }
        }
        if found {
            Ok(())
        } else {
            Err(SimError::NotASource(
                self.network.circuit.parts[part].name.clone(),
            ))
        }
    }
}

impl Network {
    /// The discrete modes of a part's devices at a state.
    pub fn part_modes<'a>(
        &'a self,
        state: &'a SimState,
        part: usize,
    ) -> impl Iterator<Item = Mode> + 'a {
        self.part_devices[part]
            .iter()
            .map(move |&(d, _)| state.mode(d))
    }

    /// Current into the first pin of part `part` (and out of its second), amperes.
    /// For a transformer this is the primary current; for a bridge, the current into `ac_a`.
    pub fn part_current(&self, state: &SimState, part: usize) -> f64 {
        self.part_devices[part]
            .iter()
            .map(|&(d, sign)| {
                if sign == 0.0 {
                    0.0
                } else {
                    sign * self.devices[d].current(
                        state.time,
                        &state.x,
                        &state.hist,
                        state.modes[d],
                    )
                }
            })
            .sum()
    }
}
