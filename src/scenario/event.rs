//! One supply event applied to the settled protector, and its measured response.

use super::*;

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
        profile.check(self.frequency_hz)?;
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

        let mut trace = Trace::new(self.event_probes(circuit));
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
        let comparator_toggles = self.comparator_toggles(&trace, onset_s);
        let window = Window {
            onset_s,
            event_end_s,
            run_end_s,
            disturbances: envelope
                .windows
                .iter()
                .map(|&(a, b)| (onset_s + a, onset_s + b))
                .collect(),
            relay_part: relay,
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

    /// The probes an event run records: the mains, the logic rail, the comparators' outputs,
    /// then the caller's own.
    fn event_probes(&self, circuit: &Circuit) -> Vec<Probe> {
        let mut probes = vec![Probe::Voltage {
            node: circuit.parts[self.mains.part].pins[0],
        }];
        if let Some(node) = self.rail {
            probes.push(Probe::Voltage { node });
        }
        for (_, node) in &self.comparators {
            probes.push(Probe::Voltage { node: *node });
        }
        for p in &self.options.probes {
            if !probes.contains(p) {
                probes.push(p.clone());
            }
        }
        probes
    }

    /// Each comparator's output toggles from the onset on.
    fn comparator_toggles(&self, trace: &Trace, onset_s: f64) -> Vec<(String, usize)> {
        // Comparator decisions count only while the logic rail is above 80% of its value at
        // the start of the recording (a collapsing supply drags outputs without deciding).
        let rail_column = self
            .rail
            .and_then(|node| trace.column(&Probe::Voltage { node }));
        let rail_normal = rail_column.and_then(|c| c.first().copied());
        let powered = |k: usize| match (rail_column, rail_normal) {
            (Some(c), Some(normal)) => c[k] >= 0.8 * normal,
            _ => true,
        };
        self.comparators
            .iter()
            .map(|(name, node)| {
                let column = trace.column(&Probe::Voltage { node: *node }).unwrap_or(&[]);
                (
                    name.clone(),
                    toggles(&trace.time, column, onset_s, 1.0, &powered),
                )
            })
            .collect()
    }
}
