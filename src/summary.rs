//! Summaries of a run for reports: the relays' timelines and the settled probe values.
//!
//! Pure functions over a [`Trace`]; rendering is the caller's.

use std::fmt::Write as _;

use serde::Serialize;

use crate::circuit::{Circuit, PartSpec};
use crate::engine::{EventKind, RunStats, Start};
use crate::probe::Trace;
use crate::units::{Engineering, Quantity};

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

/// The report of a plain run (a power-up, no supply event): its JSON object and its text.
pub struct RunReport<'a> {
    /// The circuit's name (its file, or the built-in guard).
    pub name: &'a str,
    /// The circuit.
    pub circuit: &'a Circuit,
    /// How the run began.
    pub start: Start,
    /// Simulated time, seconds.
    pub duration_s: f64,
    /// The window the settled values cover, seconds.
    pub window_s: f64,
    /// The recorded run.
    pub trace: &'a Trace,
    /// The solver's counters.
    pub stats: &'a RunStats,
    /// Wall time, seconds.
    pub wall_s: f64,
    /// Where the trace was written, if it was.
    pub trace_file: Option<&'a str>,
}

impl RunReport<'_> {
    /// The report as one JSON object.
    pub fn json(&self) -> serde_json::Value {
        let circuit = self.circuit;
        serde_json::json!({
            "circuit": self.name,
            "title": circuit.title,
            "duration_s": self.duration_s,
            "settled_window_s": self.window_s,
            "probes": settled_values(circuit, self.trace, self.window_s),
            "relays": relay_timelines(circuit, self.trace),
            "events": self.trace.events.iter().map(|e| serde_json::json!({
                "time_s": e.time,
                "part": circuit.parts[e.part].name,
                "kind": e.kind,
            })).collect::<Vec<_>>(),
            "stats": self.stats,
            "wall_time_s": self.wall_s,
            "trace": self.trace_file,
        })
    }

    /// The report as text: the relays' timelines and the settled values; the discrete events
    /// and the solver's counters when asked.
    pub fn text(&self, with_events: bool, with_stats: bool) -> String {
        let mut out = String::new();
        let circuit = self.circuit;
        if circuit.title.is_empty() {
            say!(out, "{}", self.name);
        } else {
            say!(out, "{}: {}", self.name, circuit.title);
        }
        say!(
            out,
            "simulated {} from {} in {} steps ({:.3} s wall, {:.0}x real time)",
            Engineering(self.duration_s, Quantity::Time),
            match self.start {
                Start::Rest => "rest",
                Start::OperatingPoint => "the operating point",
            },
            self.stats.accepted_steps,
            self.wall_s,
            self.duration_s / self.wall_s.max(1e-9)
        );
        for r in relay_timelines(circuit, self.trace) {
            say!(out);
            relay_text(&mut out, &r);
        }
        say!(
            out,
            "\nsettled values over the last {}:",
            Engineering(self.window_s, Quantity::Time)
        );
        say!(
            out,
            "{:<22} {:>14} {:>14} {:>14} {:>14}",
            "probe",
            "mean",
            "min",
            "max",
            "final"
        );
        for s in settled_values(circuit, self.trace, self.window_s) {
            say!(
                out,
                "{:<22} {:>14.6} {:>14.6} {:>14.6} {:>14.6}",
                s.probe,
                s.mean,
                s.min,
                s.max,
                s.last
            );
        }
        if with_events && !self.trace.events.is_empty() {
            say!(out, "\ndiscrete events:");
            for e in &self.trace.events {
                say!(
                    out,
                    "  {:>12.6} ms  {:<14} {}",
                    e.time * 1e3,
                    circuit.parts[e.part].name,
                    e.kind.describe()
                );
            }
        }
        if with_stats {
            let s = self.stats;
            say!(
                out,
                "\nsolver: {} accepted steps, {} rejected, {} Newton failures, {} Newton iterations, {} factorisations ({} with a new pivot order), {} restarts, {} located events",
                s.accepted_steps,
                s.rejected_steps,
                s.newton_failures,
                s.newton_iterations,
                s.factorizations,
                s.reorders,
                s.restarts,
                s.located_events
            );
        }
        if let Some(file) = self.trace_file {
            say!(
                out,
                "\ntrace: {} rows x {} probes written to {file}",
                self.trace.time.len(),
                self.trace.probes.len(),
            );
        }
        out
    }
}

/// One relay's timeline as text.
fn relay_text(out: &mut String, r: &RelayTimeline) {
    let Some(pickup) = r.first_pickup_s else {
        say!(out, "relay `{}` never picked up", r.relay);
        return;
    };
    say!(
        out,
        "relay `{}` first picked up at {:.3} ms",
        r.relay,
        pickup * 1e3
    );
    if let Some(made) = r.first_contact_made_s {
        say!(
            out,
            "  normally-open contact first made at {:.3} ms",
            made * 1e3
        );
    }
    if let Some(settled) = r.contact_settled_s {
        say!(
            out,
            "  contact closed for good (after bounce) at {:.3} ms",
            settled * 1e3
        );
    }
    say!(
        out,
        "  {} armature transition{}; {} at the end",
        r.armature_transitions,
        if r.armature_transitions == 1 { "" } else { "s" },
        if r.operated_at_end {
            "picked up"
        } else {
            "released"
        }
    );
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
            trace.time.push(f64::from(k) * 0.01);
            trace.columns[0].push(f64::from(k));
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
