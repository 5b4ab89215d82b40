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
use crate::circuit::Circuit;
use crate::devices::{Device, Method, Mna, Mode, SolveContext};
use crate::waveform::Waveform;

mod envelope;
mod error;
mod events;
mod locate;
mod newton;
mod settings;
mod simulator;
mod step;
pub use envelope::{CycleSummary, EnvelopeFollower, EnvelopeSettings, Jump};
pub use error::*;
pub use events::*;
pub use settings::*;

pub use lu::{DenseLu, RefactorError, Singular, SparseLu};
pub use network::{Network, UnknownKind};

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
