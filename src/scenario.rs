//! One-event runs: power the protector up, wait until it has settled, apply a disturbance
//! profile at a cycle boundary plus its phase angle, run until it has restored and settled
//! again (or a limit), and measure.

use serde::Serialize;

use crate::circuit::{Circuit, PartSpec};
use crate::engine::{
    DiscreteEvent, Network, Observer, RunStats, Settings, SimError, SimState, Simulator, Start,
};
use crate::measure::{load_path_openings, measure, minimum_after, toggles, Measurements, Window};
use crate::probe::{Probe, Trace};
use crate::profile::{Envelope, Profile};
use crate::waveform::Waveform;

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
        "{} within the power-up limit of {limit_s} s",
        match relay {
            Some(r) => format!("relay `{r}` did not connect the load (pick up and make its normally-open contact)"),
            None => "the circuit did not settle (repeat cycle after cycle)".to_string(),
        }
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

/// Options of an event run.
#[derive(Clone, Debug)]
pub struct EventOptions {
    /// Override of the nominal RMS voltage and frequency.
    pub nominal: Option<(f64, f64)>,
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
    /// itself cycle after cycle within a fiftieth of `settle_tolerance`. Default on.
    pub skip_steady: bool,
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
            settings: Settings::default(),
            probes: Vec::new(),
        }
    }
}

/// The result of an event run.
#[derive(Clone, Debug, Serialize)]
pub struct EventRun {
    /// The event in compact form.
    pub event: String,
    /// Nominal RMS voltage and frequency used.
    pub nominal_rms_v: f64,
    /// Nominal frequency, hertz.
    pub frequency_hz: f64,
    /// When the power-up was judged settled (every relay connected, the circuit periodic),
    /// seconds.
    pub settled_at_s: f64,
    /// The power-up limit, seconds.
    pub settle_limit_s: f64,
    /// The limit on the run after the event's end, seconds.
    pub restore_limit_s: f64,
    /// Onset of the first disturbance, seconds.
    pub onset_s: f64,
    /// End of the event, seconds.
    pub event_end_s: f64,
    /// End of the run, seconds.
    pub run_end_s: f64,
    /// Whether the protector was back in its pre-event state and settled by the end.
    pub settled_after: bool,
    /// The timing measurements.
    pub measurements: Measurements,
    /// Smallest supply-rail voltage from onset to the end of the run, volts.
    pub min_rail_v: Option<f64>,
    /// The rail node measured.
    pub rail: Option<String>,
    /// Output toggles of each comparator from onset on.
    pub comparator_toggles: Vec<(String, usize)>,
    /// Solver counters of the whole run (power-up included).
    pub stats: RunStats,
    /// Recorded waveforms from `pre_cycles` before the onset.
    #[serde(skip)]
    pub trace: Trace,
    /// The envelope applied.
    #[serde(skip)]
    pub envelope: Envelope,
}

/// Counts discrete events (for the settling test) and forwards to an optional trace.
struct Watch<'a> {
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

/// Whether two cycle-boundary solutions agree within `tolerance` on every node.
fn periodic(a: &[f64], b: &[f64], nodes: usize, tolerance: f64) -> bool {
    (1..nodes).all(|i| (a[i] - b[i]).abs() <= tolerance * a[i].abs().max(b[i].abs()).max(1.0))
}

/// Advances cycle by cycle until `done` holds for the state and the last `quiet` cycles
/// were periodic and free of discrete changes, or `limit_s` is reached. Returns whether it
/// settled.
#[allow(clippy::too_many_arguments)]
fn run_until_settled(
    sim: &mut Simulator,
    state: &mut SimState,
    period: f64,
    first_boundary: f64,
    options: &EventOptions,
    limit_s: f64,
    trace: &mut Option<&mut Trace>,
    done: &dyn Fn(&Simulator, &SimState) -> bool,
) -> Result<bool, SimError> {
    let nodes = sim.network().circuit().nodes.len();
    let mut previous = state.solution().to_vec();
    let mut quiet = 0;
    let mut boundary = first_boundary;
    while boundary <= limit_s + 1e-12 {
        let mut watch = Watch {
            events: 0,
            trace: trace.as_deref_mut(),
        };
        sim.advance(state, boundary, &mut watch)?;
        let now = state.solution();
        let calm = watch.events == 0 && state.pending().is_empty();
        if calm && periodic(&previous, now, nodes, options.settle_tolerance) {
            quiet += 1;
        } else {
            quiet = 0;
        }
        previous.copy_from_slice(now);
        if quiet >= options.settle_cycles && done(sim, state) {
            return Ok(true);
        }
        boundary += period;
    }
    Ok(false)
}

/// Indices of the circuit's relays.
fn relay_parts(circuit: &Circuit) -> Vec<usize> {
    circuit
        .parts
        .iter()
        .enumerate()
        .filter(|(_, p)| matches!(p.spec, PartSpec::Relay(_)))
        .map(|(i, _)| i)
        .collect()
}

/// The relay part switching the load.
fn find_relay(circuit: &Circuit, name: Option<&str>) -> Result<Option<usize>, ScenarioError> {
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
fn find_rail(circuit: &Circuit, name: Option<&str>) -> Result<Option<usize>, ScenarioError> {
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
fn relay_state(
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

/// The default power-up and restore limit of a circuit, seconds: 10 s, or five times the
/// circuit's longest RC time constant when that is longer. Each capacitor's time constant is
/// taken with the largest resistor at either of its pins, an upper estimate of the delay it
/// can set: a reconnection delay that charges a capacitor through a resistor to a threshold
/// lasts at most a few time constants.
///
/// ```
/// let guard = sagtrip::circuit_file::parse_circuit(sagtrip::builtin::REFERENCE_GUARD, "guard").unwrap();
/// // c_delay 10 uF charged through r_delay 220 kohm: 2.2 s, five times 11 s.
/// assert!((sagtrip::scenario::derived_limit_s(&guard) - 11.0).abs() < 1e-9);
/// ```
pub fn derived_limit_s(circuit: &Circuit) -> f64 {
    let largest_resistor_at = |node: usize| {
        circuit
            .parts
            .iter()
            .filter(|p| p.pins.contains(&node))
            .filter_map(|p| match p.spec {
                PartSpec::Resistor { resistance } => Some(resistance),
                _ => None,
            })
            .fold(0.0, f64::max)
    };
    let longest = circuit
        .parts
        .iter()
        .filter_map(|p| match p.spec {
            PartSpec::Capacitor { capacitance, .. } => Some(
                capacitance
                    * p.pins
                        .iter()
                        .filter(|&&n| n != 0)
                        .map(|&n| largest_resistor_at(n))
                        .fold(0.0, f64::max),
            ),
            _ => None,
        })
        .fold(0.0, f64::max);
    (5.0 * longest).max(10.0)
}

/// Powers `circuit` up on its nominal supply until it has settled.
pub fn settle(circuit: &Circuit, options: &EventOptions) -> Result<Settled, ScenarioError> {
    let mains = find_mains(circuit, options.mains.as_deref())?;
    let (rms, frequency_hz) = options.nominal.unwrap_or((mains.rms, mains.frequency_hz));
    let relay = find_relay(circuit, options.relay.as_deref())?.ok_or(ScenarioError::NoRelay)?;
    let relays = relay_parts(circuit);
    let rail = find_rail(circuit, options.rail.as_deref())?;
    let derived = derived_limit_s(circuit);
    let settle_limit_s = options.settle_limit_s.unwrap_or(derived);
    let restore_limit_s = options.restore_limit_s.unwrap_or(derived);
    let period = 1.0 / frequency_hz;
    let steady = Waveform::Sine {
        amplitude: rms * std::f64::consts::SQRT_2,
        frequency_hz,
        phase_deg: mains.phase_deg,
        offset: 0.0,
    };
    let mut sim = Simulator::new(circuit, options.settings.clone());
    sim.set_source_waveform(mains.part, steady)?;
    let mut state = sim.start(Start::Rest)?;
    let offset = boundary_offset(&mains, period);
    // Powered up means every relay has connected its load path (armature picked up,
    // normally-open contact made, bounce over) and the circuit repeats cycle after cycle.
    let connected = |sim: &Simulator, s: &SimState, r: usize| {
        relay_state(sim, s, r).is_some_and(|m| m.operated && m.normally_open_closed)
    };
    let settled = run_until_settled(
        &mut sim,
        &mut state,
        period,
        next_boundary(offset, period, period),
        options,
        settle_limit_s,
        &mut None,
        &|sim, s| relays.iter().all(|&r| connected(sim, s, r)),
    )?;
    if !settled {
        return Err(ScenarioError::NotSettled {
            relay: relays
                .iter()
                .find(|&&r| !connected(&sim, &state, r))
                .map(|&r| circuit.parts[r].name.clone()),
            limit_s: settle_limit_s,
        });
    }
    let relay = Some(relay);
    let pre_event_relay = relay.and_then(|r| relay_state(&sim, &state, r));
    let comparators = circuit
        .parts
        .iter()
        .filter(|p| matches!(p.spec, PartSpec::Comparator(_)))
        .map(|p| (p.name.clone(), p.pins[2]))
        .collect();
    Ok(Settled {
        settled_at_s: state.time,
        sim,
        state,
        mains,
        rms,
        frequency_hz,
        relay,
        rail,
        pre_event_relay,
        comparators,
        settle_limit_s,
        restore_limit_s,
        options: options.clone(),
    })
}

/// Time of the source's rising zero crossing nearest after 0 (2 pi f t + phase = 2 pi k).
fn boundary_offset(mains: &Mains, period: f64) -> f64 {
    -mains.phase_deg / 360.0 * period
}

/// The first rising zero crossing at or after `t`.
fn next_boundary(offset: f64, period: f64, t: f64) -> f64 {
    let k = ((t - offset) / period - 1e-9).ceil();
    offset + k * period
}

/// Powers `circuit` up, applies `profile` and measures the response.
pub fn run_event(
    circuit: &Circuit,
    profile: &Profile,
    options: &EventOptions,
) -> Result<EventRun, ScenarioError> {
    settle(circuit, options)?.run(circuit, profile)
}

impl Settled {
    /// Integrates from the state to the end of the event. With `skip_steady`, once the
    /// circuit repeats itself for 3 cycles in a row (within a fiftieth of the settling
    /// tolerance, nothing pending) while the event's level stays constant, whole cycles of
    /// that constant stretch are skipped (the state at a zero crossing then stands for every
    /// later one), leaving one cycle before the stretch ends.
    fn run_through_event(
        &self,
        sim: &mut Simulator,
        state: &mut SimState,
        trace: &mut Trace,
        envelope: &Envelope,
        onset_s: f64,
        event_end_s: f64,
    ) -> Result<(), SimError> {
        let options = &self.options;
        let period = 1.0 / self.frequency_hz;
        let offset = boundary_offset(&self.mains, period);
        if options.skip_steady {
            let nodes = sim.network().circuit().nodes.len();
            let tolerance = options.settle_tolerance / 50.0;
            let mut previous = state.solution().to_vec();
            let mut quiet = 0;
            let mut boundary = next_boundary(offset, period, onset_s + 1e-9);
            while boundary < event_end_s - period {
                let mut watch = Watch {
                    events: 0,
                    trace: Some(&mut *trace),
                };
                sim.advance(state, boundary, &mut watch)?;
                let calm = watch.events == 0 && state.pending().is_empty();
                if calm && periodic(&previous, state.solution(), nodes, tolerance) {
                    quiet += 1;
                } else {
                    quiet = 0;
                }
                previous.copy_from_slice(state.solution());
                if quiet >= 3 {
                    if let Some(end) = envelope.constant_until(state.time - onset_s) {
                        let stretch_end = (onset_s + end).min(event_end_s);
                        let cycles = ((stretch_end - state.time) / period).floor() - 1.0;
                        if cycles >= 1.0 {
                            trace.note_skip(state.time, period, cycles as usize);
                            state.skip_ahead(cycles * period);
                            boundary += cycles * period;
                        }
                    }
                }
                boundary += period;
            }
        }
        let mut watch = Watch {
            events: 0,
            trace: Some(trace),
        };
        sim.advance(state, event_end_s, &mut watch)
    }

    /// Whether the load relay's contact is closed in the settled state.
    pub fn load_connected(&self) -> bool {
        self.pre_event_relay.is_some_and(|r| r.normally_open_closed)
    }

    /// Applies `profile` to a copy of the settled protector and measures the response.
    pub fn run(&self, circuit: &Circuit, profile: &Profile) -> Result<EventRun, ScenarioError> {
        let options = &self.options;
        let mut sim = self.sim.clone();
        let mut state = self.state.clone();
        let (rms, frequency_hz) = (self.rms, self.frequency_hz);
        let period = 1.0 / frequency_hz;
        let amplitude = rms * std::f64::consts::SQRT_2;
        let offset = boundary_offset(&self.mains, period);
        let (relay, rail, pre_event_relay) = (self.relay, self.rail, self.pre_event_relay);
        let settled_at_s = self.settled_at_s;

        // The event: onset `pre_cycles` after the settled boundary, plus the phase angle.
        let onset_s = next_boundary(offset, period, state.time + 1e-9)
            + options.pre_cycles as f64 * period
            + profile.phase_deg.rem_euclid(360.0) / 360.0 * period;
        let envelope = profile.envelope(frequency_hz);
        let event_end_s = onset_s + envelope.end_s;
        sim.set_source_waveform(
            self.mains.part,
            Waveform::Disturbed {
                amplitude,
                frequency_hz,
                phase_deg: self.mains.phase_deg,
                onset_s,
                envelope: envelope.clone(),
            },
        )?;

        let mut probes = vec![Probe::Voltage {
            node: circuit.parts[self.mains.part].pins[0],
        }];
        if let Some(node) = rail {
            probes.push(Probe::Voltage { node });
        }
        for (_, node) in &self.comparators {
            probes.push(Probe::Voltage { node: *node });
        }
        for p in &options.probes {
            if !probes.contains(p) {
                probes.push(p.clone());
            }
        }
        let mut trace = Trace::new(probes);
        trace.record(sim.network(), &state);
        self.run_through_event(
            &mut sim,
            &mut state,
            &mut trace,
            &envelope,
            onset_s,
            event_end_s,
        )?;
        // After the event: until the relay is back as it was and all is quiet and periodic.
        let back = |sim: &Simulator, s: &SimState| match (relay, pre_event_relay) {
            (Some(r), Some(before)) => relay_state(sim, s, r) == Some(before),
            _ => true,
        };
        let settled_after = run_until_settled(
            &mut sim,
            &mut state,
            period,
            next_boundary(offset, period, event_end_s + 1e-9),
            options,
            event_end_s + self.restore_limit_s,
            &mut Some(&mut trace),
            &back,
        )?;
        let run_end_s = state.time;
        // Comparator decisions count only while the logic rail is above 80% of its value at
        // the start of the recording (a collapsing supply drags outputs without deciding).
        let rail_column = rail.and_then(|node| trace.column(&Probe::Voltage { node }));
        let rail_normal = rail_column.and_then(|c| c.first().copied());
        let powered = |k: usize| match (rail_column, rail_normal) {
            (Some(c), Some(normal)) => c[k] >= 0.8 * normal,
            _ => true,
        };
        let comparator_toggles: Vec<(String, usize)> = self
            .comparators
            .iter()
            .map(|(name, node)| {
                let column = trace.column(&Probe::Voltage { node: *node }).unwrap_or(&[]);
                (
                    name.clone(),
                    toggles(&trace.time, column, onset_s, 1.0, &powered),
                )
            })
            .collect();
        let window = Window {
            onset_s,
            event_end_s,
            run_end_s,
            disturbances: envelope
                .windows
                .iter()
                .map(|&(a, b)| (onset_s + a, onset_s + b))
                .collect(),
            relay_part: relay.unwrap_or(usize::MAX),
            closed_at_onset: pre_event_relay.is_some_and(|r| r.normally_open_closed),
        };
        let measurements = measure(&trace.events, &window);
        let min_rail_v = rail.and_then(|node| {
            let column = trace.column(&Probe::Voltage { node })?;
            minimum_after(&trace.time, column, onset_s)
        });
        Ok(EventRun {
            event: profile.spec(),
            nominal_rms_v: rms,
            frequency_hz,
            settled_at_s,
            settle_limit_s: self.settle_limit_s,
            restore_limit_s: self.restore_limit_s,
            onset_s,
            event_end_s,
            run_end_s,
            settled_after,
            measurements,
            min_rail_v,
            rail: rail.map(|n| circuit.nodes[n].clone()),
            comparator_toggles,
            stats: state.stats,
            trace,
            envelope,
        })
    }
}

/// Why a replay stopped.
#[derive(Clone, Debug, PartialEq, thiserror::Error)]
pub enum ReplayError {
    /// A sample of the recording could not be read.
    #[error("sample {index}: {message}")]
    Sample {
        /// Index of the sample, from 0.
        index: usize,
        /// The reader's reason.
        message: String,
    },
    /// The recording never rises through zero: there is no point to join it at.
    #[error("the recording has no rising zero crossing to join")]
    NoCrossing,
    /// The simulation failed.
    #[error(transparent)]
    Simulation(#[from] SimError),
}

/// A trip of the load relay during a replay, in recording time.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct ReplayTrip {
    /// When the load path opened, seconds into the recording.
    pub time_s: f64,
    /// When it closed for good again (after its bounce), if it did before the end.
    pub reconnected_s: Option<f64>,
}

/// The instants a replayed event's latencies count from.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum LatencyReference {
    /// The point-on-wave start and end (as `run` counts from the true onset and end).
    PointOnWave,
    /// The IEC 61000-4-30 Urms(1/2) start and end (no clean departure in the waveform).
    UrmsHalfCycle,
}

/// How the protector answered one detected event of a recording.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct EventResponse {
    /// The event as detected (IEC 61000-4-30 method, with its point-on-wave start and end).
    pub event: crate::detect::Event,
    /// Whether a trip was assigned to it.
    pub tripped: bool,
    /// What the latencies count from.
    pub latencies_from: LatencyReference,
    /// From the event's start to the trip, milliseconds.
    pub trip_latency_ms: Option<f64>,
    /// From the event's end to the last reconnection, milliseconds; `None` if the load
    /// reconnected before the end (see `reconnected_during_event`). Never negative.
    pub restore_latency_ms: Option<f64>,
    /// The last reconnection came before the event's end.
    pub reconnected_during_event: bool,
    /// Openings of the load path assigned to the event (bounce excluded).
    pub openings: usize,
    /// The load path opened or closed more than once for the event.
    pub chatter: bool,
    /// The trip, in recording time.
    pub trip: Option<ReplayTrip>,
}

/// The result of replaying a recording through the protector.
#[derive(Clone, Debug, Serialize)]
pub struct Replay {
    /// Each detected event with the protector's answer.
    pub responses: Vec<EventResponse>,
    /// Trips not explained by any detected event.
    pub nuisance_trips: Vec<ReplayTrip>,
    /// Every trip.
    pub trips: Vec<ReplayTrip>,
    /// The detection on the recording.
    #[serde(skip)]
    pub detection: crate::detect::Detection,
    /// Recording time of the first rising zero crossing, where the simulation joined it.
    pub joined_at_s: f64,
    /// Length of the recording, seconds.
    pub duration_s: f64,
    /// Lowest logic-rail voltage during the replay, volts.
    pub min_rail_v: Option<f64>,
    /// Solver counters of the replay (after the power-up).
    pub stats: RunStats,
    /// Recorded waveforms, when asked for (simulation time shifted to recording time).
    #[serde(skip)]
    pub trace: Option<Trace>,
}

/// Collects the load relay's events and the rail minimum, and optionally a trace.
struct ReplayWatch<'a> {
    relay: Option<usize>,
    rail: Option<usize>,
    events: Vec<DiscreteEvent>,
    min_rail: f64,
    trace: Option<&'a mut Trace>,
}

impl Observer for ReplayWatch<'_> {
    fn step(&mut self, network: &Network, state: &SimState) {
        if let Some(node) = self.rail {
            self.min_rail = self.min_rail.min(state.node_voltage(node));
        }
        if let Some(t) = self.trace.as_deref_mut() {
            t.record(network, state);
        }
    }
    fn event(&mut self, network: &Network, event: &DiscreteEvent) {
        if Some(event.part) == self.relay {
            self.events.push(*event);
        }
        if let Some(t) = self.trace.as_deref_mut() {
            t.event(network, event);
        }
    }
}

impl Settled {
    /// Drives a copy of the settled protector with a recording: `samples` are volts (already
    /// scaled) at `rate` per second. The simulation joins the recording at its first rising
    /// zero crossing, on a zero crossing of its own nominal sine, so there is no step. The
    /// recording is read in chunks of one second (memory stays bounded) and detected at the
    /// same time; each trip is then assigned to the detected event it follows (within one
    /// second of the event's end) or reported as a nuisance trip.
    pub fn replay<E: std::fmt::Display>(
        &self,
        samples: impl Iterator<Item = Result<f64, E>>,
        rate: f64,
        thresholds: crate::detect::Thresholds,
        probes: Option<Vec<Probe>>,
    ) -> Result<Replay, ReplayError> {
        self.replay_with_progress(samples, rate, thresholds, probes, &mut |_| {})
    }

    /// As [`Settled::replay`], calling `progress` with the seconds of recording simulated so
    /// far after each one-second chunk (for a progress display on long recordings).
    pub fn replay_with_progress<E: std::fmt::Display>(
        &self,
        samples: impl Iterator<Item = Result<f64, E>>,
        rate: f64,
        thresholds: crate::detect::Thresholds,
        probes: Option<Vec<Probe>>,
        progress: &mut dyn FnMut(f64),
    ) -> Result<Replay, ReplayError> {
        let mut sim = self.sim.clone();
        let mut state = self.state.clone();
        let before = state.stats;
        let period = 1.0 / self.frequency_hz;
        let offset = boundary_offset(&self.mains, period);
        // Follow the recording's own sample spacing.
        sim.set_max_step(sim.settings().max_step_s.min(2.0 / rate));
        let t_sim0 = next_boundary(offset, period, state.time + period);
        let mut detector =
            crate::detect::Detector::new(rate, self.rms, self.frequency_hz, thresholds);
        let mut trace = probes.map(|p| {
            let mut t = Trace::new(p);
            t.min_interval_s = 0.25 / rate;
            t
        });
        let mut watch = ReplayWatch {
            relay: self.relay,
            rail: self.rail,
            events: Vec::new(),
            min_rail: f64::INFINITY,
            trace: trace.as_mut(),
        };
        // The settled sine carries on up to the join, so the supply never pauses: the
        // recording's samples take over only from that rising zero crossing.
        sim.advance(&mut state, t_sim0, &mut watch)
            .map_err(ReplayError::Simulation)?;
        let chunk = (rate as usize).max(16);
        let mut buffer: Vec<f64> = Vec::with_capacity(chunk + 1);
        let mut previous: Option<f64> = None;
        // Sim time minus recording time, once joined; index of buffer[0].
        let mut shift: Option<f64> = None;
        let mut first_index = 0usize;
        let flush = |sim: &mut Simulator,
                     state: &mut SimState,
                     watch: &mut ReplayWatch<'_>,
                     buffer: &[f64],
                     first_index: usize,
                     shift: f64|
         -> Result<(), ReplayError> {
            let start_s = first_index as f64 / rate + shift;
            sim.set_source_waveform(
                self.mains.part,
                Waveform::Samples {
                    start_s,
                    interval_s: 1.0 / rate,
                    values: buffer.into(),
                },
            )
            .map_err(ReplayError::Simulation)?;
            let end = start_s + (buffer.len() - 1) as f64 / rate;
            if end > state.time {
                sim.advance(state, end, watch)
                    .map_err(ReplayError::Simulation)?;
            }
            Ok(())
        };
        for (index, sample) in samples.enumerate() {
            let v = sample.map_err(|e| ReplayError::Sample {
                index,
                message: e.to_string(),
            })?;
            detector.push(v);
            match shift {
                None => {
                    if let Some(p) = previous {
                        if p < 0.0 && v >= 0.0 {
                            let crossing = (index - 1) as f64 + p / (p - v);
                            shift = Some(t_sim0 - crossing / rate);
                            first_index = index - 1;
                            buffer.push(p);
                            buffer.push(v);
                        }
                    }
                }
                Some(s) => {
                    buffer.push(v);
                    if buffer.len() > chunk {
                        flush(&mut sim, &mut state, &mut watch, &buffer, first_index, s)?;
                        progress((index + 1) as f64 / rate);
                        let last = buffer[buffer.len() - 1];
                        first_index += buffer.len() - 1;
                        buffer.clear();
                        buffer.push(last);
                    }
                }
            }
            previous = Some(v);
        }
        let shift = shift.ok_or(ReplayError::NoCrossing)?;
        if buffer.len() >= 2 {
            flush(
                &mut sim,
                &mut state,
                &mut watch,
                &buffer,
                first_index,
                shift,
            )?;
        }
        let detection = detector.finish();
        let min_rail_v = watch.min_rail.is_finite().then_some(watch.min_rail);

        // Trips in recording time.
        let to_rec = |t: f64| t - shift;
        let relay_events: Vec<&DiscreteEvent> = watch.events.iter().collect();
        let trips: Vec<ReplayTrip> = load_path_openings(&relay_events, self.load_connected())
            .into_iter()
            .map(|o| ReplayTrip {
                time_s: to_rec(o.opened_s),
                reconnected_s: o.reconnected_s.map(to_rec),
            })
            .collect();
        // Every trip from a cycle before an event's start to a second after its end belongs
        // to that event; more than one opening or reconnection is chatter.
        let mut assigned = vec![false; trips.len()];
        let mut responses = Vec::new();
        for event in &detection.events {
            let end = event.start_s + event.duration_s;
            let mine: Vec<usize> = (0..trips.len())
                .filter(|&i| {
                    !assigned[i]
                        && trips[i].time_s >= event.start_s - period
                        && trips[i].time_s <= end + 1.0
                })
                .collect();
            for &i in &mine {
                assigned[i] = true;
            }
            let openings: Vec<crate::measure::Opening> = mine
                .iter()
                .map(|&i| crate::measure::Opening {
                    opened_s: trips[i].time_s,
                    reconnected_s: trips[i].reconnected_s,
                })
                .collect();
            let trip = mine.first().map(|&i| trips[i].clone());
            let reconnected = mine.last().and_then(|&i| trips[i].reconnected_s);
            // Latencies count from the point-on-wave start and end, as `run` counts from
            // the event's true onset and end; the Urms(1/2) times stand in when the
            // waveform gave no clean departure.
            let (onset, onset_from) = match event.wave_start_s {
                Some(t) => (t, LatencyReference::PointOnWave),
                None => (event.start_s, LatencyReference::UrmsHalfCycle),
            };
            let wave_end = match (event.wave_start_s, event.wave_end_s) {
                (Some(_), Some(t)) => t,
                _ => end,
            };
            responses.push(EventResponse {
                event: event.clone(),
                tripped: trip.is_some(),
                latencies_from: onset_from,
                trip_latency_ms: trip.as_ref().map(|t| (t.time_s - onset).max(0.0) * 1e3),
                restore_latency_ms: reconnected
                    .filter(|&r| r >= wave_end)
                    .map(|r| (r - wave_end) * 1e3),
                reconnected_during_event: reconnected.is_some_and(|r| r < wave_end),
                openings: openings.len(),
                chatter: crate::measure::chatters(&openings, 1),
                trip,
            });
        }
        let nuisance_trips = trips
            .iter()
            .zip(&assigned)
            .filter(|(_, a)| !**a)
            .map(|(t, _)| t.clone())
            .collect();
        let mut stats = state.stats;
        stats.accepted_steps -= before.accepted_steps;
        stats.newton_iterations -= before.newton_iterations;
        if let Some(t) = trace.as_mut() {
            for time in &mut t.time {
                *time -= shift;
            }
            for e in &mut t.events {
                e.time -= shift;
            }
        }
        Ok(Replay {
            responses,
            nuisance_trips,
            trips,
            duration_s: detection.duration_s,
            detection,
            joined_at_s: to_rec(t_sim0),
            min_rail_v,
            stats,
            trace,
        })
    }
}
