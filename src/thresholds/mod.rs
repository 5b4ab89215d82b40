//! Static trip and reset voltages found by bisection on steady supply levels, and slow ramps
//! through each threshold that show whether the relay chatters there.
//!
//! A **trip test** at level `x` holds the supply at `x` (a fraction of nominal) for the hold
//! time, starting from the settled, connected protector: did the load path open? A **reset
//! test** first holds a level that certainly trips (a little beyond the trip threshold),
//! then holds `x`: did the load reconnect while `x` was held? Both outcomes are monotonic in
//! `x` for a sound design, so bisection brackets each threshold to the resolution asked.

use serde::Serialize;

use crate::circuit::Circuit;
use crate::profile::{Duration, Profile, Step, DEFAULT_EDGE_S};
use crate::scenario::{EventRun, ScenarioError, Settled};

mod report;
pub use report::*;

/// How thresholds are searched.
#[derive(Clone, Debug)]
pub struct ThresholdOptions {
    /// Bisection stops when the bracket is narrower than this, volts RMS. Default 0.1 V.
    pub resolution_v: f64,
    /// How long each test level is held, seconds: longer than the protector's trip and
    /// reconnection delays. Default 2 s.
    pub hold_s: f64,
    /// Time of each slow ramp (down to beyond the threshold, or back), seconds. Default 10 s.
    pub ramp_s: f64,
    /// Lowest level searched for the under-voltage trip, fraction of nominal. Default 0.3.
    pub lowest: f64,
    /// Highest level searched for the over-voltage trip, fraction of nominal. Default 1.6.
    pub highest: f64,
    /// How far beyond a trip threshold the reset tests and the ramps go, fraction of
    /// nominal. Default 0.05.
    pub beyond: f64,
}

impl Default for ThresholdOptions {
    fn default() -> Self {
        Self {
            resolution_v: 0.1,
            hold_s: 2.0,
            ramp_s: 10.0,
            lowest: 0.3,
            highest: 1.6,
            beyond: 0.05,
        }
    }
}

/// Which side of nominal.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Side {
    /// Under-voltage.
    Under,
    /// Over-voltage.
    Over,
}

/// One threshold bracketed by bisection.
#[derive(Clone, Copy, Debug, Serialize)]
pub struct Threshold {
    /// The middle of the final bracket, volts RMS.
    pub volts: f64,
    /// The bracket, volts RMS: one end behaves one way, the other the other way.
    pub bracket_v: (f64, f64),
    /// The middle of the bracket, percent of nominal.
    pub percent: f64,
    /// Simulated tests it took.
    pub tests: usize,
}

/// A slow ramp from nominal through a trip threshold to `beyond` past it, a hold, and back.
#[derive(Clone, Debug, Serialize)]
pub struct Ramp {
    /// The far level of the ramp, percent of nominal.
    pub far_percent: f64,
    /// Ramp rate, volts RMS per second.
    pub rate_v_per_s: f64,
    /// Supply level when the load path first opened on the way out, volts RMS.
    pub trip_v: Option<f64>,
    /// Supply level when the load path finally reconnected, volts RMS (after the
    /// protector's reconnection delay, so beyond the static reset voltage by about the
    /// ramp rate times that delay).
    pub reconnect_v: Option<f64>,
    /// Armature pick-ups and drop-outs during the ramp and after it.
    pub relay_transitions: usize,
    /// The load path opened or closed more than once (the chatter of every report).
    pub relay_chatters: bool,
    /// Openings of the load path during the ramp and after it, bounce excluded.
    pub load_path_openings: usize,
    /// Toggles of each comparator's output while its logic supply was up.
    pub comparator_toggles: Vec<(String, usize)>,
}

impl Ramp {
    /// The most toggles of any one comparator's output.
    pub fn most_toggles(&self) -> usize {
        self.comparator_toggles
            .iter()
            .map(|(_, k)| *k)
            .max()
            .unwrap_or(0)
    }

    /// What the ramp showed, for a report: `relay chatters (N armature moves)`, `one trip,
    /// one reset; a comparator toggled N times (a slower ramp may make the relay chatter)`
    /// when the relay did not follow a toggling comparator, or `one trip, one reset`.
    pub fn verdict(&self) -> String {
        let toggles = self.most_toggles();
        if self.relay_chatters {
            format!(
                "chatters (the load path opened {} times; {} armature moves)",
                self.load_path_openings, self.relay_transitions
            )
        } else if toggles > 2 {
            format!(
                "one trip, one reset; a comparator toggled {toggles} times (a slower ramp may \
                 make the relay chatter)"
            )
        } else {
            "one trip, one reset".to_string()
        }
    }
}

/// Both thresholds of one side, their hysteresis and the ramp through them.
#[derive(Clone, Debug, Serialize)]
pub struct SideThresholds {
    /// Which side.
    pub side: Side,
    /// The supply level at which the protector disconnects the load.
    pub trip: Option<Threshold>,
    /// The supply level at which it reconnects after a trip (held long enough).
    pub reset: Option<Threshold>,
    /// |reset - trip|, volts RMS.
    pub hysteresis_v: Option<f64>,
    /// The slow ramp through the trip threshold and back.
    pub ramp: Option<Ramp>,
    /// Why a threshold is missing, where one is.
    pub note: Option<String>,
}

/// Everything `sagtrip thresholds` reports.
#[derive(Clone, Debug, Serialize)]
pub struct StaticThresholds {
    /// Nominal RMS voltage, volts.
    pub nominal_rms_v: f64,
    /// Nominal frequency, hertz.
    pub frequency_hz: f64,
    /// Resolution of the bisection, volts RMS.
    pub resolution_v: f64,
    /// Hold time of each test level, seconds.
    pub hold_s: f64,
    /// Under-voltage side.
    pub under: SideThresholds,
    /// Over-voltage side.
    pub over: SideThresholds,
}

/// A constant level held for `seconds` (a ramp from the level to itself).
fn hold(level: f64, seconds: f64) -> Step {
    Step::Ramp {
        from: level,
        to: level,
        duration: Duration::Seconds(seconds),
    }
}

/// Back to nominal at the end, so the run after the event is on a normal supply.
fn back() -> Step {
    Step::Gap {
        duration: Duration::Seconds(0.0),
    }
}

fn profile(steps: Vec<Step>) -> Profile {
    Profile {
        steps,
        phase_deg: 0.0,
        edge_s: DEFAULT_EDGE_S,
    }
}

struct Tester<'a> {
    settled: &'a Settled,
    /// The settled protector with a short run after each event: a trip or reset test
    /// only asks what happened while its levels were held, not when the protector
    /// reconnects afterwards (which, behind a minutes-long restart delay, would cost every
    /// test minutes of simulated time).
    quick: Settled,
    circuit: &'a Circuit,
    hold_s: f64,
}

/// The run after a trip or reset test's levels, seconds: enough for an opening in progress
/// at the event's end to complete (a relay's release and contact travel take milliseconds).
const TEST_TAIL_S: f64 = 0.2;

impl Tester<'_> {
    fn run(&self, steps: Vec<Step>) -> Result<EventRun, ScenarioError> {
        self.quick.run(self.circuit, &profile(steps))
    }

    /// Does holding `level` disconnect the load?
    fn trips(&self, level: f64) -> Result<bool, ScenarioError> {
        Ok(self
            .run(vec![hold(level, self.hold_s), back()])?
            .measurements
            .tripped)
    }

    /// After a trip at `from`, does holding `level` reconnect the load while it is held?
    fn resets(&self, from: f64, level: f64) -> Result<Option<bool>, ScenarioError> {
        let run = self.run(vec![
            hold(from, self.hold_s),
            hold(level, self.hold_s),
            back(),
        ])?;
        let m = &run.measurements;
        if !m.tripped {
            return Ok(None);
        }
        // The final reconnection came before the end of the event: while `level` was held.
        let end_ms = run.envelope.end_s * 1e3;
        Ok(Some(
            m.load_connected_at_end
                && m.reconnections
                    .last()
                    .is_some_and(|r| r.since_onset_ms < end_ms),
        ))
    }
}

/// Bisects between `yes` (where `test` is true) and `no` (where it is false) until the
/// bracket is narrower than `resolution` (fraction of nominal).
fn bisect(
    mut yes: f64,
    mut no: f64,
    resolution: f64,
    mut test: impl FnMut(f64) -> Result<bool, ScenarioError>,
) -> Result<(f64, f64, usize), ScenarioError> {
    let mut tests = 0;
    while (yes - no).abs() > resolution {
        let mid = 0.5 * (yes + no);
        tests += 1;
        if test(mid)? {
            yes = mid;
        } else {
            no = mid;
        }
    }
    Ok((yes, no, tests))
}

fn threshold(rms: f64, a: f64, b: f64, tests: usize) -> Threshold {
    let (lo, hi) = (a.min(b), a.max(b));
    let mid = 0.5 * (lo + hi);
    Threshold {
        volts: mid * rms,
        bracket_v: (lo * rms, hi * rms),
        percent: 100.0 * mid,
        tests,
    }
}

fn side(
    tester: &Tester<'_>,
    side: Side,
    options: &ThresholdOptions,
) -> Result<SideThresholds, ScenarioError> {
    let rms = tester.settled.rms;
    let resolution = options.resolution_v / rms;
    let (extreme, sign) = match side {
        Side::Under => (options.lowest, -1.0),
        Side::Over => (options.highest, 1.0),
    };
    let mut result = SideThresholds {
        side,
        trip: None,
        reset: None,
        hysteresis_v: None,
        ramp: None,
        note: None,
    };
    // Trip: the extreme must trip, nominal must not.
    if !tester.trips(extreme)? {
        result.note = Some(format!(
            "no trip found: holding {:.0}% ({:.1} V) for {} s does not disconnect the load",
            100.0 * extreme,
            extreme * rms,
            tester.hold_s
        ));
        return Ok(result);
    }
    let (yes, no, tests) = bisect(extreme, 1.0, resolution, |x| tester.trips(x))?;
    let trip = threshold(rms, yes, no, tests + 1);
    result.trip = Some(trip);

    // Reset: from beyond the trip threshold; nominal must reconnect, the trip side of the
    // bracket must not.
    let from = yes + sign * options.beyond;
    let from = if sign < 0.0 { from.max(0.0) } else { from };
    match tester.resets(from, 1.0)? {
        None => {
            result.note = Some(format!(
                "holding {:.1}% for {} s did not trip, though the search found the trip \
                 threshold at {:.1}%: the outcome is not monotonic in the level",
                100.0 * from,
                tester.hold_s,
                trip.percent
            ));
            return Ok(result);
        }
        Some(false) => {
            result.note = Some(format!(
                "after a trip the load did not reconnect within {} s at nominal: give a \
                 longer hold (longer than the reconnection delay)",
                tester.hold_s
            ));
            return Ok(result);
        }
        Some(true) => {}
    }
    let (yes_r, no_r, tests_r) = bisect(1.0, yes, resolution, |x| {
        Ok(tester.resets(from, x)?.unwrap_or(false))
    })?;
    let reset = threshold(rms, yes_r, no_r, tests_r + 1);
    result.reset = Some(reset);
    result.hysteresis_v = Some((reset.volts - trip.volts).abs());

    // The slow ramp: nominal to beyond the trip, a hold, back to nominal.
    let far = from;
    let ramp_profile = profile(vec![Step::Variation {
        residual: far,
        decrease: Duration::Seconds(options.ramp_s),
        hold: Duration::Seconds(tester.hold_s),
        increase: Duration::Seconds(options.ramp_s),
    }]);
    let run = tester.settled.run(tester.circuit, &ramp_profile)?;
    let m = &run.measurements;
    let level_at = |since_onset_s: f64| run.envelope.level(since_onset_s) * rms;
    result.ramp = Some(Ramp {
        far_percent: 100.0 * far,
        rate_v_per_s: (1.0 - far).abs() * rms / options.ramp_s,
        trip_v: m.trip_latency_ms.map(|t| level_at(t / 1e3)),
        reconnect_v: m
            .reconnections
            .last()
            .filter(|_| m.load_connected_at_end)
            .map(|r| level_at(r.since_onset_ms / 1e3)),
        relay_transitions: m.relay_transitions,
        relay_chatters: m.chatter,
        load_path_openings: m.load_path_openings,
        comparator_toggles: run.comparator_toggles.clone(),
    });
    Ok(result)
}

/// Finds the four static thresholds of the settled protector (the two sides in parallel)
/// and runs a slow ramp through each side.
pub fn find(
    settled: &Settled,
    circuit: &Circuit,
    options: &ThresholdOptions,
) -> Result<StaticThresholds, ScenarioError> {
    let mut quick = settled.clone();
    quick.restore_limit_s = quick.restore_limit_s.min(TEST_TAIL_S);
    let tester = Tester {
        settled,
        quick,
        circuit,
        hold_s: options.hold_s,
    };
    let (under, over) = rayon::join(
        || side(&tester, Side::Under, options),
        || side(&tester, Side::Over, options),
    );
    Ok(StaticThresholds {
        nominal_rms_v: settled.rms,
        frequency_hz: settled.frequency_hz,
        resolution_v: options.resolution_v,
        hold_s: options.hold_s,
        under: under?,
        over: over?,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn ramp(transitions: usize, toggles: usize) -> Ramp {
        Ramp {
            far_percent: 80.0,
            rate_v_per_s: 4.0,
            trip_v: Some(200.0),
            reconnect_v: Some(201.0),
            relay_transitions: transitions,
            relay_chatters: transitions > 2,
            load_path_openings: transitions / 2,
            comparator_toggles: vec![("cmp_a".into(), 1), ("cmp_b".into(), toggles)],
        }
    }

    #[test]
    fn the_verdict_names_a_toggling_comparator_the_relay_did_not_follow() {
        assert_eq!(ramp(2, 1).verdict(), "one trip, one reset");
        assert_eq!(
            ramp(6, 900).verdict(),
            "chatters (the load path opened 3 times; 6 armature moves)"
        );
        let quiet_relay = ramp(2, 406).verdict();
        assert!(quiet_relay.starts_with("one trip, one reset; a comparator toggled 406 times"));
        assert_eq!(ramp(2, 406).most_toggles(), 406);
    }
}
