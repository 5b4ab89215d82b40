//! Settings of the transient engine, how a run starts, and its counters.

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
    /// The run stops with [`crate::engine::SimError::Stalled`] when [`STALL_WINDOW`] passes
    /// of the step loop cover less simulated time than this many seconds each on average:
    /// a circuit whose time constants are far shorter than its signals (a femtohenry coil, a
    /// femtofarad reservoir) or a storm of discrete changes would otherwise run for ever.
    /// Default 1 ns (the reference guard averages 100 us).
    pub min_average_step_s: f64,
}

/// Passes of the step loop over which [`Settings::min_average_step_s`] is judged.
pub const STALL_WINDOW: u64 = 100_000;

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
            min_average_step_s: 1e-9,
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
    /// Envelope steps taken (see [`crate::engine::EnvelopeFollower`]).
    pub envelope_steps: u64,
    /// Whole mains cycles those steps jumped over (their time is in `skipped_s` too).
    pub cycles_jumped: u64,
    /// Cycles simulated for envelope following's own use: the monodromy matrices'
    /// columns and the checking cycle of every step tried (accepted or not).
    pub envelope_cycles: u64,
}
