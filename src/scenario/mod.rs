//! One-event runs: power the protector up, wait until it has settled, apply a disturbance
//! profile at a cycle boundary plus its phase angle, run until it has restored and settled
//! again (or a limit), and measure.

use crate::circuit::{Circuit, PartSpec};
use crate::engine::{
    DiscreteEvent, EnvelopeFollower, EnvelopeSettings, Network, Observer, RunStats, Settings,
    SimError, SimState, Simulator, Start,
};
use crate::measure::{load_path_openings, measure, minimum_after, toggles, Measurements, Window};
use crate::probe::{Probe, Trace};
use crate::profile::{Envelope, Profile};
use crate::waveform::Waveform;
use serde::Serialize;

mod event;
mod replay;
mod report;
mod settle;
pub use event::*;
pub use replay::*;
pub use report::*;
pub use settle::*;

/// The supply the profile drives.
#[derive(Clone, Debug, PartialEq)]
pub struct Mains {
    /// Index of the source part.
    pub part: usize,
    /// Nominal RMS voltage, volts.
    pub rms: f64,
    /// Frequency, hertz.
    pub frequency_hz: f64,
    /// Phase of the source at t = 0, degrees.
    pub phase_deg: f64,
}

/// The frequencies a mains supply may have, hertz: every public supply (16.7 Hz railway,
/// 50 and 60 Hz, 400 Hz aircraft) lies well inside.
pub const MAINS_FREQUENCY_RANGE_HZ: (f64, f64) = (1.0, 1000.0);

/// Why an event run could not be made.
#[derive(Clone, Debug, PartialEq, thiserror::Error)]
pub enum ScenarioError {
    /// No voltage source with a sine waveform to drive, or the one named is not one.
    #[error("{0}")]
    NoMains(String),
    /// A named relay or node does not exist.
    #[error("{0}")]
    Unknown(String),
    /// The power-up did not reach the operating state within its limit: a relay never
    /// connected its load path (normally-open contact made with the armature picked up), or
    /// the circuit never repeated cycle after cycle. No event can be judged from there.
    #[error(
        "{} within the power-up limit of {} s",
        match relay {
            Some(r) => format!("relay `{r}` did not connect the load (pick up and make its normally-open contact)"),
            None => "the circuit did not settle (repeat cycle after cycle)".to_string(),
        },
        crate::units::significant(*limit_s)
    )]
    NotSettled {
        /// The relay that did not connect the load, if that was the reason.
        relay: Option<String>,
        /// The power-up limit, seconds.
        limit_s: f64,
    },
    /// The circuit has no relay whose contact could switch a load, so no verdict on trips
    /// can be given.
    #[error("the circuit has no relay to switch the load: trips cannot be judged")]
    NoRelay,
    /// The event has a step that makes no event (no time, or shorter than its edges).
    #[error(transparent)]
    Profile(#[from] crate::profile::ProfileError),
    /// The mains runs at a frequency no supply has.
    #[error(
        "the mains `{part}` runs at {frequency_hz:e} Hz: a mains supply is allowed from {} to {} Hz",
        MAINS_FREQUENCY_RANGE_HZ.0,
        MAINS_FREQUENCY_RANGE_HZ.1
    )]
    MainsFrequency {
        /// The mains source part.
        part: String,
        /// Its frequency, hertz.
        frequency_hz: f64,
    },
    /// The simulation failed.
    #[error(transparent)]
    Simulation(#[from] SimError),
}

/// Finds the mains source: the part named `name`, or the only sine voltage source.
pub fn find_mains(circuit: &Circuit, name: Option<&str>) -> Result<Mains, ScenarioError> {
    let candidates: Vec<usize> = circuit
        .parts
        .iter()
        .enumerate()
        .filter(|(_, p)| matches!(p.spec, PartSpec::VoltageSource(Waveform::Sine { .. })))
        .map(|(i, _)| i)
        .collect();
    let part = match name {
        Some(n) => circuit
            .part(n)
            .filter(|i| candidates.contains(i))
            .ok_or_else(|| {
                ScenarioError::NoMains(format!(
                    "`{n}` is not a sine voltage source of the circuit (sine sources: {})",
                    names(circuit, &candidates)
                ))
            })?,
        None => match candidates.as_slice() {
            [one] => *one,
            [] => {
                return Err(ScenarioError::NoMains(
                    "the circuit has no sine voltage source to drive as the mains".into(),
                ))
            }
            _ => {
                return Err(ScenarioError::NoMains(format!(
                    "several sine voltage sources ({}): name the mains with --mains",
                    names(circuit, &candidates)
                )))
            }
        },
    };
    let PartSpec::VoltageSource(Waveform::Sine {
        amplitude,
        frequency_hz,
        phase_deg,
        ..
    }) = circuit.parts[part].spec
    else {
        unreachable!("candidates are sine voltage sources")
    };
    Ok(Mains {
        part,
        rms: amplitude / std::f64::consts::SQRT_2,
        frequency_hz,
        phase_deg,
    })
}

fn names(circuit: &Circuit, parts: &[usize]) -> String {
    if parts.is_empty() {
        return "none".into();
    }
    parts
        .iter()
        .map(|&i| circuit.parts[i].name.as_str())
        .collect::<Vec<_>>()
        .join(", ")
}

/// A nominal supply: its RMS voltage and frequency.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Nominal {
    /// RMS voltage, volts.
    pub rms_v: f64,
    /// Frequency, hertz.
    pub frequency_hz: f64,
}

/// Options of an event run.
#[derive(Clone, Debug)]
pub struct EventOptions {
    /// Override of the mains source's nominal RMS voltage and frequency.
    pub nominal: Option<Nominal>,
    /// Name of the mains source part (default: the only sine voltage source).
    pub mains: Option<String>,
    /// Name of the relay switching the load (default: the only relay).
    pub relay: Option<String>,
    /// Name of the logic supply-rail node (default: `vcc` if present, else the output of
    /// the only regulator).
    pub rail: Option<String>,
    /// Settled: successive cycle boundaries agree within this fraction of each node's
    /// voltage (or of 1 V, whichever is larger). Default 0.5%.
    pub settle_tolerance: f64,
    /// Settled also needs this many quiet cycles in a row (no discrete change). Default 3.
    pub settle_cycles: usize,
    /// Longest power-up before the event, seconds. `None` (the default): derived from the
    /// circuit by [`derived_limit_s`].
    pub settle_limit_s: Option<f64>,
    /// Longest run after the event's end, seconds. `None` (the default): derived from the
    /// circuit by [`derived_limit_s`].
    pub restore_limit_s: Option<f64>,
    /// Cycles recorded before the onset. Default 2.
    pub pre_cycles: usize,
    /// Skip whole cycles of a long constant stretch of an event once the circuit repeats
    /// itself cycle after cycle within a fiftieth of `settle_tolerance`, and follow the
    /// envelope of a slow drift (power-up, reconnection delay) in steps of many cycles
    /// ([`crate::engine::EnvelopeFollower`]). Off, every cycle is stepped in full.
    /// Default on.
    pub skip_steady: bool,
    /// Tolerances of envelope following.
    pub envelope: EnvelopeSettings,
    /// Engine settings.
    pub settings: Settings,
    /// Extra probes to record (besides mains, rail and comparator outputs).
    pub probes: Vec<Probe>,
}

impl Default for EventOptions {
    fn default() -> Self {
        Self {
            nominal: None,
            mains: None,
            relay: None,
            rail: None,
            settle_tolerance: 5e-3,
            settle_cycles: 3,
            settle_limit_s: None,
            restore_limit_s: None,
            pre_cycles: 2,
            skip_steady: true,
            envelope: EnvelopeSettings::default(),
            settings: Settings::default(),
            probes: Vec::new(),
        }
    }
}

/// Counts discrete events (for the settling test) and forwards to an optional trace.
pub(crate) struct Watch<'a> {
    events: usize,
    trace: Option<&'a mut Trace>,
}

impl Observer for Watch<'_> {
    fn step(&mut self, network: &Network, state: &SimState) {
        if let Some(t) = self.trace.as_deref_mut() {
            t.record(network, state);
        }
    }
    fn event(&mut self, network: &Network, event: &DiscreteEvent) {
        self.events += 1;
        if let Some(t) = self.trace.as_deref_mut() {
            t.event(network, event);
        }
    }
}

/// Indices of the circuit's relays.
pub(crate) fn relay_parts(circuit: &Circuit) -> Vec<usize> {
    circuit
        .parts
        .iter()
        .enumerate()
        .filter(|(_, p)| matches!(p.spec, PartSpec::Relay(_)))
        .map(|(i, _)| i)
        .collect()
}

/// The relay part switching the load.
pub(crate) fn find_relay(
    circuit: &Circuit,
    name: Option<&str>,
) -> Result<Option<usize>, ScenarioError> {
    let relays = relay_parts(circuit);
    match name {
        Some(n) => circuit
            .part(n)
            .filter(|i| relays.contains(i))
            .map(Some)
            .ok_or_else(|| {
                ScenarioError::Unknown(format!(
                    "`{n}` is not a relay of the circuit (relays: {})",
                    names(circuit, &relays)
                ))
            }),
        None => Ok(match relays.as_slice() {
            [one] => Some(*one),
            _ => relays.first().copied(),
        }),
    }
}

/// The supply-rail node to watch.
pub(crate) fn find_rail(
    circuit: &Circuit,
    name: Option<&str>,
) -> Result<Option<usize>, ScenarioError> {
    if let Some(n) = name {
        return circuit
            .node(n)
            .map(Some)
            .ok_or_else(|| ScenarioError::Unknown(format!("no node named `{n}` for the rail")));
    }
    if let Some(vcc) = circuit.node("vcc") {
        return Ok(Some(vcc));
    }
    Ok(circuit.parts.iter().find_map(|p| match p.spec {
        PartSpec::Regulator(_) => Some(p.pins[1]),
        _ => None,
    }))
}

/// The relay device's discrete state in a simulator state, if the part is a relay.
pub(crate) fn relay_state(
    sim: &Simulator,
    state: &SimState,
    part: usize,
) -> Option<crate::devices::RelayState> {
    sim.network().part_modes(state, part).find_map(|m| match m {
        crate::devices::Mode::Relay(r) => Some(r),
        _ => None,
    })
}

/// A protector powered up and settled on its nominal supply, ready to take events. Each
/// event runs on copies of the settled simulator and state, so one power-up serves any
/// number of events (sweeps run them in parallel).
#[derive(Clone, Debug)]
pub struct Settled {
    sim: Simulator,
    state: SimState,
    mains: Mains,
    /// Nominal RMS voltage, volts.
    pub rms: f64,
    /// Nominal frequency, hertz.
    pub frequency_hz: f64,
    relay: Option<usize>,
    rail: Option<usize>,
    pre_event_relay: Option<crate::devices::RelayState>,
    comparators: Vec<(String, usize)>,
    /// When the power-up was judged settled (a rising zero crossing), seconds.
    pub settled_at_s: f64,
    /// The power-up limit used, seconds.
    pub settle_limit_s: f64,
    /// The limit on the run after each event's end, seconds.
    pub restore_limit_s: f64,
    options: EventOptions,
}

/// Time of the source's rising zero crossing nearest after 0 (2 pi f t + phase = 2 pi k).
pub(crate) fn boundary_offset(mains: &Mains, period: f64) -> f64 {
    -mains.phase_deg / 360.0 * period
}

/// The first rising zero crossing at or after `t`.
pub(crate) fn next_boundary(offset: f64, period: f64, t: f64) -> f64 {
    let k = ((t - offset) / period - 1e-9).ceil();
    offset + k * period
}
