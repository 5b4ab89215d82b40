//! sagtrip: time-domain simulation of mains over/under-voltage protectors.
//!
//! The library holds everything; the `sagtrip` binary only parses arguments, reads and
//! writes files and prints. The data path:
//!
//! circuit file → [`circuit_file::parse_circuit`] (validated [`circuit::Circuit`]) →
//! [`engine::Simulator`] (compiled network, Newton-Raphson, adaptive trapezoidal steps,
//! located discrete events) → an [`engine::Observer`] such as [`probe::Trace`] → reports.
//!
//! Simulation does not replace testing a real unit: mains voltage can kill, and local
//! electrical codes and a licensed practitioner decide what is safe to build and install.

#![warn(missing_docs)]

/// The caution every report that carries numbers ends with.
pub const CAUTION: &str = "Caution: mains voltage can kill. These are simulated results of a \
     circuit model: they do not replace testing a real unit, the local electrical codes that \
     apply, or the judgement of a licensed practitioner.";

/// Appends a line to a report being built in a `String` (writing to a String cannot fail).
macro_rules! say {
    ($out:expr) => {
        let _ = writeln!($out);
    };
    ($out:expr, $($arg:tt)*) => {
        let _ = writeln!($out, $($arg)*);
    };
}

pub mod builtin;
pub mod circuit;
pub mod circuit_file;
pub mod detect;
pub mod devices;
pub mod engine;
pub mod measure;
pub mod output;
pub mod plot;
pub use plot::reference_curves;
pub mod probe;
pub mod profile;
pub mod progress;
pub mod recording;
pub mod scenario;
pub mod summary;
pub mod sweep;
pub mod synth;
pub mod table;
pub mod thresholds;
pub mod tolerance;
pub mod units;
pub mod waveform;
