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
//!
//! # Examples
//!
//! One supply event on the built-in reference guard, and its measured response:
//!
//! ```
//! use sagtrip::{builtin, circuit_file::parse_circuit, profile, scenario};
//! let guard = parse_circuit(builtin::REFERENCE_GUARD, "guard").unwrap();
//! let dip = profile::parse_spec("dip:40%:10cyc", profile::DEFAULT_EDGE_S).unwrap();
//! let run = scenario::run_event(&guard, &dip, &scenario::EventOptions::default()).unwrap();
//! assert!(run.measurements.tripped);
//! println!("trips after {:.1} ms", run.measurements.trip_latency_ms.unwrap());
//! ```
//!
//! Power up once, then run several events (a sweep's points, in parallel) from the settled
//! state:
//!
//! ```
//! use sagtrip::{builtin, circuit_file::parse_circuit, profile, scenario, sweep};
//! let guard = parse_circuit(builtin::REFERENCE_GUARD, "guard").unwrap();
//! let settled = scenario::settle(&guard, &scenario::EventOptions::default()).unwrap();
//! // (level %, duration s, phase degrees): a 20 ms interruption and a 200 ms dip to 40%.
//! let grid = [(0.0, 0.02, 0.0), (40.0, 0.2, 90.0)];
//! let points = sweep::run_points(&settled, &guard, &grid, profile::DEFAULT_EDGE_S, &|_| {});
//! assert_eq!(points[0].outcome, sweep::Outcome::RidesThrough);
//! assert_eq!(points[1].outcome, sweep::Outcome::Trips);
//! ```
//!
//! A timing table from a plan (here the class 3 plan cut to one test, without the static
//! thresholds and the longest ride-through, to keep the example quick):
//!
//! ```
//! use sagtrip::{builtin, circuit_file::parse_circuit, scenario, table};
//! let guard = parse_circuit(builtin::REFERENCE_GUARD, "guard").unwrap();
//! let mut plan = table::default_plan(3, 50.0).unwrap();
//! plan.tests.truncate(1);
//! plan.phases = vec![0.0];
//! plan.thresholds = false;
//! plan.ride_through_levels.clear();
//! let source = table::Source { text: builtin::REFERENCE_GUARD, path: "guard", circuit: &guard };
//! let options = scenario::EventOptions::default();
//! let (t, _) = table::build(source, &options, &plan, table::Cases::Nominal, &()).unwrap();
//! print!("{}", table::markdown(&t));
//! ```
//!
//! Events in a recording: a synthesised 40% dip, found by the IEC 61000-4-30 detector:
//!
//! ```
//! use sagtrip::{detect, profile, synth};
//! let dip = profile::parse_spec("dip:40%:10cyc", profile::DEFAULT_EDGE_S).unwrap();
//! let options = synth::SynthOptions {
//!     rms_v: 230.0,
//!     frequency_hz: 50.0,
//!     sample_rate: 10_000,
//!     lead_s: 0.5,
//!     tail_s: 0.5,
//!     volts_per_full_scale: synth::SynthOptions::default_full_scale(230.0),
//!     format: synth::SampleFormat::Int16,
//!     harmonics: Vec::new(),
//!     noise: 0.0,
//! };
//! let volts = synth::samples(&dip, &options);
//! let found = detect::detect(&volts, 10_000.0, 230.0, 50.0, detect::Thresholds::default());
//! assert_eq!(found.events.len(), 1);
//! assert_eq!(found.events[0].kind, detect::DisturbanceKind::Dip);
//! ```

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
