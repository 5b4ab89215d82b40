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
