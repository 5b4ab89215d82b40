//! Summaries of a run for reports: the relays' timelines and the settled probe values.
//!
//! Pure functions over a [`Trace`]; rendering is the caller's.

use serde::Serialize;

use crate::circuit::{Circuit, PartSpec};
use crate::engine::EventKind;
use crate::probe::Trace;

/// What a relay did during a run, from its located events.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct RelayTimeline {
    /// The relay part's name.
    pub relay: String,
    /// First armature pick-up, seconds.
    pub first_pickup_s: Option<f64>,
    /// First making of the normally-open contact, seconds.
    pub first_contact_made_s: Option<f64>,
    /// The normally-open contact's last making within that first closure's bounce, seconds:
    /// from here it stays closed (until a later drop-out).
    pub contact_settled_s: Option<f64>,
    /// Armature pick-ups and drop-outs in the whole run.
    pub armature_transitions: usize,
    /// Whether the armature is picked up at the end of the run.
    pub operated_at_end: bool,
}

/// Statistics of one probe over a window.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct ProbeStats {
    /// Column label (`NODE_V` or `PART_A`).
    pub probe: String,
    /// Time-weighted mean over the window.
    pub mean: f64,
    /// Smallest value in the window.
    pub min: f64,
    /// Largest value in the window.
    pub max: f64,
    /// Value at the end of the run.
    pub last: f64,
}

/// The timeline of every relay in the circuit.
pub fn relay_timelines(circuit: &Circuit, trace: &Trace) -> Vec<RelayTimeline> {
    circuit
        .parts
        .iter()
        .enumerate()
        .filter(|(_, p)| matches!(p.spec, PartSpec::Relay(_)))
        .map(|(index, part)| {
            let events: Vec<_> = trace.events.iter().filter(|e| e.part == index).collect();
            let first_pickup_s = events
                .iter()
                .find(|e| e.kind == EventKind::PickUp)
                .map(|e| e.time);
            let first_contact_made_s = events
                .iter()
                .find(|e| e.kind == EventKind::NormallyOpenMade)
                .map(|e| e.time);
            // The settled closure: the last make before the contact next breaks for good
            // (a drop-out) or the run ends.
            let contact_settled_s = first_contact_made_s.map(|made| {
                let mut settled = made;
                for e in events.iter().filter(|e| e.time >= made) {
                    match e.kind {
                        EventKind::NormallyOpenMade => settled = e.time,
                        EventKind::DropOut => break,
                        _ => {}
                    }
                }
                settled
            });
            let armature: Vec<_> = events
                .iter()
                .filter(|e| matches!(e.kind, EventKind::PickUp | EventKind::DropOut))
                .collect();
            RelayTimeline {
                relay: part.name.clone(),
                first_pickup_s,
                first_contact_made_s,
                contact_settled_s,
                armature_transitions: armature.len(),
                operated_at_end: armature.last().is_some_and(|e| e.kind == EventKind::PickUp),
            }
        })
        .collect()
}

/// Statistics of every probe over the last `window_s` seconds of the trace.
pub fn settled_values(circuit: &Circuit, trace: &Trace, window_s: f64) -> Vec<ProbeStats> {
    let Some(&end) = trace.time.last() else {
        return Vec::new();
    };
    let start = end - window_s;
    let first = trace.time.partition_point(|&t| t < start);
    trace
        .probes
        .iter()
        .zip(&trace.columns)
        .map(|(probe, column)| {
            let times = &trace.time[first..];
            let values = &column[first..];
            let mut area = 0.0;
            for k in 1..times.len() {
                area += 0.5 * (values[k] + values[k - 1]) * (times[k] - times[k - 1]);
            }
            let span = times.last().copied().unwrap_or(end) - times.first().copied().unwrap_or(end);
            let last = values.last().copied().unwrap_or(f64::NAN);
            ProbeStats {
                probe: probe.label(circuit),
                mean: if span > 0.0 { area / span } else { last },
                min: values.iter().copied().fold(f64::INFINITY, f64::min),
                max: values.iter().copied().fold(f64::NEG_INFINITY, f64::max),
                last,
            }
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::engine::DiscreteEvent;
    use crate::probe::Probe;

    #[test]
    fn settled_mean_of_a_ramp_is_its_midpoint() {
        let circuit =
            crate::circuit_file::parse_circuit(crate::builtin::REFERENCE_GUARD, "guard").unwrap();
        let mut trace = Trace::new(vec![Probe::Voltage { node: 1 }]);
        for k in 0..=100 {
            trace.time.push(k as f64 * 0.01);
            trace.columns[0].push(k as f64);
        }
        let stats = settled_values(&circuit, &trace, 0.2);
        // Last 0.2 s of a ramp from 0 to 100 over 1 s: 80 .. 100, mean 90.
        assert!((stats[0].mean - 90.0).abs() < 1e-9);
        assert_eq!(stats[0].min, 80.0);
        assert_eq!(stats[0].max, 100.0);
    }

    #[test]
    fn relay_timeline_follows_the_bounce() {
        let circuit =
            crate::circuit_file::parse_circuit(crate::builtin::REFERENCE_GUARD, "guard").unwrap();
        let relay = circuit.part("relay").unwrap();
        let mut trace = Trace::new(Vec::new());
        let event = |time, kind| DiscreteEvent {
            time,
            part: relay,
            kind,
        };
        trace.events = vec![
            event(0.7, EventKind::PickUp),
            event(0.706, EventKind::NormallyOpenMade),
            event(0.7065, EventKind::NormallyOpenBroken),
            event(0.707, EventKind::NormallyOpenMade),
        ];
        let t = &relay_timelines(&circuit, &trace)[0];
        assert_eq!(t.first_pickup_s, Some(0.7));
        assert_eq!(t.first_contact_made_s, Some(0.706));
        assert_eq!(t.contact_settled_s, Some(0.707));
        assert_eq!(t.armature_transitions, 1);
        assert!(t.operated_at_end);
    }
}
