//! Why a simulation stops.

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
    /// The run made too little progress: many passes of the step loop covered almost no
    /// simulated time.
    #[error(transparent)]
    Stalled(Box<Stall>),
    /// A waveform was given to a part that is not a source.
    #[error("part `{0}` is not a voltage or current source")]
    NotASource(String),
    /// The operating point could not be found by plain Newton, gmin stepping or source
    /// stepping.
    #[error("no operating point: plain Newton, gmin stepping and source stepping all failed; last failure: {0}")]
    OperatingPoint(Box<SimError>),
}

/// Why one Newton solve failed.
pub(crate) enum NewtonFailure {
    Diverged,
    Singular(usize),
}

/// A run that made too little progress: where, how little, and what moved fastest.
#[derive(Clone, Debug, PartialEq, thiserror::Error)]
#[error(
    "the run stalled at t = {time_s:.9} s: {passes} steps covered only {span_s:.3e} s \
     (on average {average_s:.3e} s, below the {min_average_s:.0e} s allowed){events}; \
     fastest-moving: {fastest} (a time constant of about {time_constant_s:.1e} s); \
     involved: {}. A part value far from any real part (a tiny inductance or \
     capacitance, a huge bounce count) is the usual cause",
    involved.join(", "),
    events = if *events > 0 { format!(", with {events} discrete changes") } else { String::new() }
)]
pub struct Stall {
    /// Where the run stopped, seconds.
    pub time_s: f64,
    /// Passes of the step loop in the window judged.
    pub passes: u64,
    /// Simulated time they covered, seconds.
    pub span_s: f64,
    /// Their average, seconds.
    pub average_s: f64,
    /// The smallest average allowed, seconds.
    pub min_average_s: f64,
    /// Discrete changes located in the window.
    pub events: u64,
    /// The unknown that moved most against its tolerance in the last step.
    pub fastest: String,
    /// Its rate of change as a time constant (value over rate), seconds.
    pub time_constant_s: f64,
    /// The parts and nodes around it.
    pub involved: Vec<String>,
}
