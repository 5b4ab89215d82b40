//! Timing measurements of a protector's response to a supply event, as pure functions of a
//! run's located events and recorded samples. Every quantity is defined in
//! `docs/measurements.md`; the definitions here are the reference.

use serde::Serialize;

use crate::engine::{DiscreteEvent, EventKind};

/// Where the measurements look: the event's timing and the relay whose normally-open
/// contact switches the load.
#[derive(Clone, Debug, PartialEq)]
pub struct Window {
    /// Onset of the first disturbance, seconds.
    pub onset_s: f64,
    /// End of the last disturbance (the supply back at nominal), seconds.
    pub event_end_s: f64,
    /// End of the run, seconds.
    pub run_end_s: f64,
    /// Start and end of each disturbance of the event (gaps excluded), seconds.
    pub disturbances: Vec<(f64, f64)>,
    /// Index of the load relay's part (`None`: no relay, so no relay event is counted).
    pub relay_part: Option<usize>,
    /// Whether the load path (normally-open contact) was closed at onset.
    pub closed_at_onset: bool,
}

/// The measured response. Times in milliseconds.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Measurements {
    /// The load path opened at least once at or after onset.
    pub tripped: bool,
    /// Onset to the first opening of the load path.
    pub trip_latency_ms: Option<f64>,
    /// End of the event to the final reconnection of the load path (after its bounce);
    /// `None` if it did not trip, is still open at the end of the run, or reconnected for
    /// good before the event ended (see `reconnections`). Never negative.
    pub restore_latency_ms: Option<f64>,
    /// Every reconnection of the load path at or after onset, in time order.
    pub reconnections: Vec<Reconnection>,
    /// First drop-out at or after onset to the load path opening.
    pub release_time_ms: Option<f64>,
    /// Last pick-up to the first making of the load path after it.
    pub operate_time_ms: Option<f64>,
    /// First to last making of the load path in its final closure.
    pub bounce_ms: Option<f64>,
    /// Armature pick-ups and drop-outs at or after onset.
    pub relay_transitions: usize,
    /// Openings of the load path at or after onset, contact bounce excluded (see
    /// [`load_path_openings`]).
    pub load_path_openings: usize,
    /// Closings of the load path at or after onset, contact bounce excluded.
    pub load_path_closings: usize,
    /// The load path opened, or closed, more than once per disturbance of the event (gaps
    /// excluded). The one definition of chatter in every report; comparator toggles are
    /// reported apart and never called chatter.
    pub chatter: bool,
    /// Time the load path was open between onset and the end of the run.
    pub load_interruption_ms: f64,
    /// Whether the load path is closed at the end of the run.
    pub load_connected_at_end: bool,
}

/// One reconnection of the load path (its last make, after the bounce).
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct Reconnection {
    /// Onset to the reconnection, milliseconds.
    pub since_onset_ms: f64,
    /// The disturbance (1 = the first, gaps excluded) that ended last before the
    /// reconnection; `None` if it came before the first disturbance ended.
    pub after_disturbance: Option<usize>,
    /// The end of that disturbance to the reconnection, milliseconds; never negative.
    pub latency_ms: Option<f64>,
    /// Whether the reconnection came while a disturbance was still in progress.
    pub during_disturbance: bool,
}

/// One opening of the load path and its reconnection.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct Opening {
    /// When the normally-open contact broke with the armature released, seconds.
    pub opened_s: f64,
    /// The last make of the reconnection that followed (after its bounce), seconds; `None`
    /// if the path was still open after the last event.
    pub reconnected_s: Option<f64>,
}

/// The openings of the load path (the normally-open contact) in the `events` of one relay,
/// contact bounce excluded: an opening is the contact breaking while the armature is
/// released (a break while it is picked up is bounce), and it ends at the path's next
/// making, moved on to the last make of that closure's bounce. `closed` is the path's state
/// before the first event. The one definition of openings and closings that `run`,
/// `sweep`, `table` and `replay` share.
pub fn load_path_openings(events: &[&DiscreteEvent], closed: bool) -> Vec<Opening> {
    let mut openings: Vec<Opening> = Vec::new();
    let mut path_closed = closed;
    let mut operated = closed;
    for e in events {
        match e.kind {
            EventKind::PickUp => operated = true,
            EventKind::DropOut => operated = false,
            EventKind::NormallyOpenBroken if path_closed && !operated => {
                path_closed = false;
                openings.push(Opening {
                    opened_s: e.time,
                    reconnected_s: None,
                });
            }
            EventKind::NormallyOpenMade => {
                path_closed = true;
                if let Some(last) = openings.last_mut() {
                    last.reconnected_s = Some(e.time);
                }
            }
            _ => {}
        }
    }
    openings
}

/// Whether the load path chattered: it opened, or closed, more than once per disturbance.
pub fn chatters(openings: &[Opening], disturbances: usize) -> bool {
    let allowed = disturbances.max(1);
    let closings = openings
        .iter()
        .filter(|o| o.reconnected_s.is_some())
        .count();
    openings.len() > allowed || closings > allowed
}

/// Measures the relay's response from its located events.
pub fn measure(events: &[DiscreteEvent], window: &Window) -> Measurements {
    let mine: Vec<&DiscreteEvent> = events
        .iter()
        .filter(|e| Some(e.part) == window.relay_part && e.time >= window.onset_s - 1e-12)
        .collect();
    let ms = |s: f64| s * 1e3;
    let first = |kind: EventKind, after: f64| {
        mine.iter()
            .find(|e| e.kind == kind && e.time >= after - 1e-12)
            .map(|e| e.time)
    };
    let first_break = first(EventKind::NormallyOpenBroken, window.onset_s);
    let tripped = window.closed_at_onset && first_break.is_some();

    // Load path open intervals from onset to the end of the run.
    let mut closed = window.closed_at_onset;
    let mut opened_at = window.onset_s;
    let mut open_total = 0.0;
    let mut last_make: Option<f64> = None;
    for e in &mine {
        match e.kind {
            EventKind::NormallyOpenBroken if closed => {
                closed = false;
                opened_at = e.time;
            }
            EventKind::NormallyOpenMade if !closed => {
                closed = true;
                open_total += e.time - opened_at;
                last_make = Some(e.time);
            }
            _ => {}
        }
    }
    if !closed {
        open_total += window.run_end_s - opened_at;
    }

    let dropout = first(EventKind::DropOut, window.onset_s);
    let release_time_ms =
        dropout.and_then(|d| first(EventKind::NormallyOpenBroken, d).map(|b| ms(b - d)));
    let last_pickup = mine
        .iter()
        .rev()
        .find(|e| e.kind == EventKind::PickUp)
        .map(|e| e.time);
    let first_make_after_pickup = last_pickup.and_then(|p| first(EventKind::NormallyOpenMade, p));
    let operate_time_ms = last_pickup
        .zip(first_make_after_pickup)
        .map(|(p, m)| ms(m - p));
    let restored = tripped && closed;
    let openings = load_path_openings(&mine, window.closed_at_onset);
    let reconnections: Vec<Reconnection> = openings
        .iter()
        .filter_map(|o| o.reconnected_s)
        .map(|r| reconnection(r, window))
        .collect();
    // Counted from the event's end only when the final reconnection came after it.
    let restore_latency_ms = if restored {
        last_make
            .filter(|&m| m >= window.event_end_s)
            .map(|m| ms(m - window.event_end_s))
    } else {
        None
    };
    let bounce_ms = if restored {
        first_make_after_pickup
            .zip(last_make)
            .map(|(f, l)| ms(l - f))
    } else {
        None
    };
    let relay_transitions = mine
        .iter()
        .filter(|e| matches!(e.kind, EventKind::PickUp | EventKind::DropOut))
        .count();
    let chatter = chatters(&openings, window.disturbances.len());
    Measurements {
        tripped,
        trip_latency_ms: if tripped {
            first_break.map(|b| ms(b - window.onset_s))
        } else {
            None
        },
        restore_latency_ms,
        reconnections,
        release_time_ms,
        operate_time_ms,
        bounce_ms,
        relay_transitions,
        load_path_openings: openings.len(),
        load_path_closings: openings
            .iter()
            .filter(|o| o.reconnected_s.is_some())
            .count(),
        chatter,
        load_interruption_ms: ms(open_total),
        load_connected_at_end: closed,
    }
}

/// Places a reconnection at `time_s` against the event's disturbances.
fn reconnection(time_s: f64, window: &Window) -> Reconnection {
    let ended = window
        .disturbances
        .iter()
        .rposition(|&(_, end)| end <= time_s);
    let during_disturbance = window
        .disturbances
        .iter()
        .any(|&(start, end)| start <= time_s && time_s < end);
    Reconnection {
        since_onset_ms: (time_s - window.onset_s) * 1e3,
        after_disturbance: ended.map(|k| k + 1),
        latency_ms: ended.map(|k| (time_s - window.disturbances[k].1) * 1e3),
        during_disturbance,
    }
}

/// How many times a logic-level signal crosses the middle of its recorded range, from
/// `from_s` on, counting only where `powered` holds for both samples (a comparator whose
/// supply collapses swings without deciding anything). A signal that never spans at least
/// `min_swing` counts no crossings.
pub fn toggles(
    time: &[f64],
    values: &[f64],
    from_s: f64,
    min_swing: f64,
    powered: &dyn Fn(usize) -> bool,
) -> usize {
    let lo = values.iter().copied().fold(f64::INFINITY, f64::min);
    let hi = values.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let swing = hi - lo;
    if swing.is_nan() || swing < min_swing {
        return 0;
    }
    let mid = 0.5 * (lo + hi);
    let start = time.partition_point(|&t| t < from_s).max(1);
    (start..values.len())
        .filter(|&k| (values[k - 1] < mid) != (values[k] < mid) && powered(k - 1) && powered(k))
        .count()
}

/// The smallest sample of `values` at or after `from_s`.
pub fn minimum_after(time: &[f64], values: &[f64], from_s: f64) -> Option<f64> {
    let start = time.partition_point(|&t| t < from_s);
    values[start..].iter().copied().reduce(f64::min)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn event(time: f64, kind: EventKind) -> DiscreteEvent {
        DiscreteEvent {
            time,
            part: 3,
            kind,
        }
    }

    fn window() -> Window {
        Window {
            onset_s: 1.0,
            event_end_s: 1.2,
            run_end_s: 3.0,
            disturbances: vec![(1.0, 1.2)],
            relay_part: Some(3),
            closed_at_onset: true,
        }
    }

    #[test]
    fn a_trip_and_restore_with_bounce() {
        // Synthetic timeline with known answers (docs/measurements.md definitions).
        let events = [
            event(1.050, EventKind::DropOut),
            event(1.053, EventKind::NormallyOpenBroken),
            event(1.053, EventKind::NormallyClosedMade),
            event(1.900, EventKind::PickUp),
            event(1.906, EventKind::NormallyClosedBroken),
            event(1.906, EventKind::NormallyOpenMade),
            event(1.9065, EventKind::NormallyOpenBroken),
            event(1.907, EventKind::NormallyOpenMade),
        ];
        let m = measure(&events, &window());
        assert!(m.tripped);
        assert!((m.trip_latency_ms.unwrap() - 53.0).abs() < 1e-9);
        assert!((m.release_time_ms.unwrap() - 3.0).abs() < 1e-9);
        assert!((m.operate_time_ms.unwrap() - 6.0).abs() < 1e-9);
        assert!((m.bounce_ms.unwrap() - 1.0).abs() < 1e-9);
        // Restore: event end 1.2 s to the final make at 1.907 s.
        assert!((m.restore_latency_ms.unwrap() - 707.0).abs() < 1e-9);
        // Open 1.053 .. 1.906 and 1.9065 .. 1.907.
        assert!((m.load_interruption_ms - (853.0 + 0.5)).abs() < 1e-9);
        assert_eq!(m.relay_transitions, 2);
        assert!(!m.chatter);
        assert!(m.load_connected_at_end);
    }

    #[test]
    fn ride_through_and_chatter() {
        let m = measure(&[], &window());
        assert!(!m.tripped);
        assert_eq!(m.trip_latency_ms, None);
        assert_eq!(m.restore_latency_ms, None);
        assert_eq!(m.load_interruption_ms, 0.0);
        // Opens, closes, opens again for one disturbance: chatter.
        let events = [
            event(1.1, EventKind::DropOut),
            event(1.103, EventKind::NormallyOpenBroken),
            event(1.2, EventKind::PickUp),
            event(1.206, EventKind::NormallyOpenMade),
            event(1.3, EventKind::DropOut),
            event(1.303, EventKind::NormallyOpenBroken),
        ];
        let m = measure(&events, &window());
        assert_eq!(m.relay_transitions, 3);
        assert_eq!((m.load_path_openings, m.load_path_closings), (2, 1));
        assert!(m.chatter);
        // Never reconnected: open from 1.103 s to 1.206 s and from 1.303 s to the end.
        assert!((m.load_interruption_ms - (103.0 + 1697.0)).abs() < 1e-9);
        assert_eq!(m.restore_latency_ms, None);
        // The same sequence over a two-dip event is one opening per dip: no chatter.
        let two = Window {
            disturbances: vec![(1.0, 1.15), (1.25, 1.4)],
            ..window()
        };
        assert!(!measure(&events, &two).chatter);
    }

    #[test]
    fn reconnections_between_disturbances_are_never_negative() {
        // Two interruptions (1.0 .. 1.3 s and 2.0 .. 2.3 s) and a shallow variation
        // (2.3 .. 4.1 s) that the protector accepts: it reconnects 0.6 s after the first
        // interruption, trips on the second, and reconnects 0.7 s after it, while the
        // variation is still in progress. The event ends at 4.1 s, after the last
        // reconnection, so there is no restore latency from the event's end.
        let w = Window {
            event_end_s: 4.1,
            run_end_s: 6.0,
            disturbances: vec![(1.0, 1.3), (2.0, 2.3), (2.3, 4.1)],
            ..window()
        };
        let events = [
            event(1.05, EventKind::DropOut),
            event(1.053, EventKind::NormallyOpenBroken),
            event(1.894, EventKind::PickUp),
            event(1.9, EventKind::NormallyOpenMade),
            event(2.05, EventKind::DropOut),
            event(2.053, EventKind::NormallyOpenBroken),
            event(2.994, EventKind::PickUp),
            event(3.0, EventKind::NormallyOpenMade),
        ];
        let m = measure(&events, &w);
        assert_eq!(m.restore_latency_ms, None);
        assert_eq!(m.reconnections.len(), 2);
        let (a, b) = (m.reconnections[0], m.reconnections[1]);
        assert_eq!(a.after_disturbance, Some(1));
        assert!((a.latency_ms.unwrap() - 600.0).abs() < 1e-9);
        assert!(!a.during_disturbance);
        assert_eq!(b.after_disturbance, Some(2));
        assert!((b.latency_ms.unwrap() - 700.0).abs() < 1e-9);
        assert!(b.during_disturbance);
        assert!((b.since_onset_ms - 2000.0).abs() < 1e-9);
        // Two openings for three disturbances: no chatter.
        assert!(!m.chatter);
    }

    #[test]
    fn bounce_is_not_chatter() {
        // One trip and one reconnection with three bounces on closing: the path opened once
        // and closed once (the bounce breaks happen with the armature picked up).
        let mut events = vec![
            event(1.05, EventKind::DropOut),
            event(1.053, EventKind::NormallyOpenBroken),
            event(1.9, EventKind::PickUp),
        ];
        for k in 0..4 {
            let t = 1.906 + 0.0005 * f64::from(k);
            events.push(event(t, EventKind::NormallyOpenMade));
            if k < 3 {
                events.push(event(t + 0.00025, EventKind::NormallyOpenBroken));
            }
        }
        let m = measure(&events, &window());
        assert_eq!((m.load_path_openings, m.load_path_closings), (1, 1));
        assert!(!m.chatter);
        assert!((m.bounce_ms.unwrap() - 1.5).abs() < 1e-9);
    }

    #[test]
    fn toggle_counting() {
        let t: Vec<f64> = (0..10).map(f64::from).collect();
        let v = [0.0, 0.0, 10.0, 10.0, 0.0, 10.0, 10.0, 10.0, 0.0, 0.0];
        let always = |_| true;
        assert_eq!(toggles(&t, &v, 0.0, 1.0, &always), 4);
        assert_eq!(toggles(&t, &v, 4.5, 1.0, &always), 2);
        assert_eq!(toggles(&t, &[1.0; 10], 0.0, 1.0, &always), 0);
        // Unpowered from sample 3 to 6: the crossings there do not count.
        assert_eq!(toggles(&t, &v, 0.0, 1.0, &|k| !(3..=6).contains(&k)), 2);
    }
}
