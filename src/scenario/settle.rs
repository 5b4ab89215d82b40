//! Power-up to the operating state: the load connected and the circuit periodic.

use super::*;

/// Whether two cycle-boundary solutions agree within `tolerance` on every node.
pub(crate) fn periodic(a: &[f64], b: &[f64], nodes: usize, tolerance: f64) -> bool {
    (1..nodes).all(|i| (a[i] - b[i]).abs() <= tolerance * a[i].abs().max(b[i].abs()).max(1.0))
}

/// Advances cycle by cycle until `done` holds for the state and the last `quiet` cycles
/// were periodic and free of discrete changes, or `limit_s` is reached. Returns whether it
/// settled. With `options.skip_steady`, a slow drift between calm cycles is followed in
/// envelope steps of many cycles (see [`EnvelopeFollower`]); once `done` holds, a step
/// stops short of the cycle where the drift is predicted to fall within the settling
/// tolerance, so that settling is judged on cycles stepped in full.
#[allow(clippy::too_many_arguments)]
pub(crate) fn run_until_settled(
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
    let mut follower = options
        .skip_steady
        .then(|| EnvelopeFollower::new(sim, period, options.envelope.clone()));
    // The end of an envelope step's checking cycle, taken instead of stepping that cycle
    // again when no trace records it.
    let mut checked = None;
    while boundary <= limit_s + 1e-12 {
        let summary = if let Some((end, summary)) = checked.take() {
            *state = end;
            summary
        } else {
            let mut watch = Watch {
                events: 0,
                trace: trace.as_deref_mut(),
            };
            sim.advance_cycle(state, boundary, &mut watch)?
        };
        let now = state.solution();
        let calm = summary.events == 0 && state.pending().is_empty();
        if calm && periodic(&previous, now, nodes, options.settle_tolerance) {
            quiet += 1;
        } else {
            quiet = 0;
        }
        previous.copy_from_slice(now);
        let finished = done(sim, state);
        if quiet >= options.settle_cycles && finished {
            return Ok(true);
        }
        boundary += period;
        let Some(follower) = follower.as_mut() else {
            continue;
        };
        follower.observe(state, &summary);
        let settle_below = finished.then_some(options.settle_tolerance);
        if let Some(jump) = follower.try_step(sim, state, limit_s, settle_below)? {
            *state = jump.state;
            previous.copy_from_slice(state.solution());
            quiet = 0;
            boundary += jump.cycles as f64 * period;
            match trace.as_deref_mut() {
                Some(t) => t.note_jump(
                    state.time - jump.cycles as f64 * period,
                    period,
                    jump.cycles,
                ),
                None => checked = Some((jump.end, jump.summary)),
            }
        }
    }
    Ok(false)
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
    let (rms, frequency_hz) = options
        .nominal
        .map_or((mains.rms, mains.frequency_hz), |n| {
            (n.rms_v, n.frequency_hz)
        });
    let (lo, hi) = MAINS_FREQUENCY_RANGE_HZ;
    if !(lo..=hi).contains(&frequency_hz) {
        return Err(ScenarioError::MainsFrequency {
            part: circuit.parts[mains.part].name.clone(),
            frequency_hz,
        });
    }
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
