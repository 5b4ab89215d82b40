//! A recording replayed through the settled protector, each trip assigned to a detected event.

use super::*;

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
    /// The trace could not be written (the writer's reason).
    #[error("cannot write the trace: {0}")]
    Trace(String),
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
    /// No clean departure in the waveform: from the start of the first IEC 61000-4-30
    /// Urms(1/2) window past the threshold (a cycle before its time stamp), to the
    /// Urms(1/2) end.
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
struct ReplayWatch {
    relay: Option<usize>,
    rail: Option<usize>,
    events: Vec<DiscreteEvent>,
    min_rail: f64,
    trace: Option<Trace>,
}

/// Where a replay's probed waveforms go: the probes, and a writer to stream them to as CSV
/// (`None` keeps them in the returned [`Replay`]).
pub struct TraceOut<'w> {
    /// What to record.
    pub probes: Vec<Probe>,
    /// Where to write them as they are simulated.
    pub stream: Option<&'w mut dyn std::io::Write>,
}

/// The CSV header of a trace of `probes` (as [`Trace::write_csv`] writes it).
fn write_header(
    out: &mut dyn std::io::Write,
    probes: &[Probe],
    circuit: &Circuit,
) -> std::io::Result<()> {
    write!(out, "time_s")?;
    for p in probes {
        write!(out, ",{}", p.label(circuit))?;
    }
    writeln!(out)
}

impl ReplayWatch {
    /// Writes the rows recorded so far, in recording time (simulation time less `shift`),
    /// as [`Trace::write_csv`] writes rows, and forgets them; all of them with `all`, else
    /// all but the last (the next row is spaced from it).
    fn flush_rows(
        &mut self,
        out: &mut dyn std::io::Write,
        shift: f64,
        all: bool,
    ) -> std::io::Result<()> {
        let Some(trace) = self.trace.as_mut() else {
            return Ok(());
        };
        let done = if all {
            trace.time.len()
        } else {
            trace.time.len().saturating_sub(1)
        };
        for (row, t) in trace.time[..done].iter().enumerate() {
            write!(out, "{:.9e}", t - shift)?;
            for column in &trace.columns {
                write!(out, ",{:.9e}", column[row])?;
            }
            writeln!(out)?;
        }
        trace.time.drain(..done);
        for column in &mut trace.columns {
            column.drain(..done);
        }
        Ok(())
    }
}

impl Observer for ReplayWatch {
    fn step(&mut self, network: &Network, state: &SimState) {
        if let Some(node) = self.rail {
            self.min_rail = self.min_rail.min(state.node_voltage(node));
        }
        if let Some(t) = self.trace.as_mut() {
            t.record(network, state);
        }
    }
    fn event(&mut self, network: &Network, event: &DiscreteEvent) {
        if Some(event.part) == self.relay {
            self.events.push(*event);
        }
        if let Some(t) = self.trace.as_mut() {
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

    /// Plays one chunk of recorded samples, the first at simulation time `start_s`, as the
    /// mains source's waveform, up to its last sample.
    fn play_chunk(
        &self,
        sim: &mut Simulator,
        state: &mut SimState,
        watch: &mut ReplayWatch,
        buffer: &[f64],
        start_s: f64,
        rate: f64,
    ) -> Result<(), ReplayError> {
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
        let trace = probes.map(|probes| TraceOut {
            probes,
            stream: None,
        });
        self.replay_traced(samples, rate, thresholds, trace, progress)
    }

    /// As [`Settled::replay_with_progress`], with the probed waveforms either kept in the
    /// returned [`Replay`] or, when `trace.stream` is given, written to it as CSV (the
    /// layout of [`Trace::write_csv`]) one chunk at a time, so that memory stays bounded
    /// however long the recording; the returned trace then holds only the events.
    pub fn replay_traced<E: std::fmt::Display>(
        &self,
        samples: impl Iterator<Item = Result<f64, E>>,
        rate: f64,
        thresholds: crate::detect::Thresholds,
        trace: Option<TraceOut<'_>>,
        progress: &mut dyn FnMut(f64),
    ) -> Result<Replay, ReplayError> {
        let (probes, mut stream) = match trace {
            Some(t) => (Some(t.probes), t.stream),
            None => (None, None),
        };
        if let (Some(out), Some(p)) = (stream.as_deref_mut(), &probes) {
            write_header(out, p, self.sim.network().circuit())
                .map_err(|e| ReplayError::Trace(e.to_string()))?;
        }
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
        let trace = probes.map(|p| {
            let mut t = Trace::new(p);
            t.min_interval_s = 0.25 / rate;
            t
        });
        let mut watch = ReplayWatch {
            relay: self.relay,
            rail: self.rail,
            events: Vec::new(),
            min_rail: f64::INFINITY,
            trace,
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
                        let start_s = first_index as f64 / rate + s;
                        self.play_chunk(&mut sim, &mut state, &mut watch, &buffer, start_s, rate)?;
                        if let Some(out) = stream.as_deref_mut() {
                            watch
                                .flush_rows(out, s, false)
                                .map_err(|e| ReplayError::Trace(e.to_string()))?;
                        }
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
            let start_s = first_index as f64 / rate + shift;
            self.play_chunk(&mut sim, &mut state, &mut watch, &buffer, start_s, rate)?;
        }
        if let Some(out) = stream {
            watch
                .flush_rows(out, shift, true)
                .map_err(|e| ReplayError::Trace(e.to_string()))?;
            out.flush().map_err(|e| ReplayError::Trace(e.to_string()))?;
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
        let (responses, nuisance_trips) = assign_trips(&detection.events, &trips, period);
        let mut stats = state.stats;
        stats.accepted_steps -= before.accepted_steps;
        stats.newton_iterations -= before.newton_iterations;
        let mut trace = watch.trace.take();
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

/// Assigns each trip to the detected event it follows (from the event's onset to a second
/// after its end) and measures each event's response; more than one opening or reconnection
/// for an event is chatter. The trips no event explains are returned as nuisance trips.
fn assign_trips(
    events: &[crate::detect::Event],
    trips: &[ReplayTrip],
    period: f64,
) -> (Vec<EventResponse>, Vec<ReplayTrip>) {
    // Trips are assigned to the events they follow; more than one opening or
    // reconnection for an event is chatter.
    let mut assigned = vec![false; trips.len()];
    let mut responses = Vec::new();
    for event in events {
        let end = event.start_s + event.duration_s;
        // Latencies count from the point-on-wave start and end, as `run` counts from
        // the event's true onset and end. Without a clean departure in the waveform,
        // from the start of the first Urms(1/2) window past the threshold (one cycle
        // before its time stamp: the onset lies in that window) and the Urms(1/2) end.
        let (onset, onset_from) = match event.wave_start_s {
            Some(t) => (t, LatencyReference::PointOnWave),
            None => (event.start_s - period, LatencyReference::UrmsHalfCycle),
        };
        let wave_end = match (event.wave_start_s, event.wave_end_s) {
            (Some(_), Some(t)) => t,
            _ => end,
        };
        // Every trip from the onset to a second after the end belongs to the event.
        let mine: Vec<usize> = (0..trips.len())
            .filter(|&i| !assigned[i] && trips[i].time_s >= onset && trips[i].time_s <= end + 1.0)
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
        responses.push(EventResponse {
            event: event.clone(),
            tripped: trip.is_some(),
            latencies_from: onset_from,
            trip_latency_ms: trip.as_ref().map(|t| (t.time_s - onset) * 1e3),
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
    (responses, nuisance_trips)
}
