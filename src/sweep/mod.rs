//! Depth-against-duration sweeps: the protector's response over a grid of residual (or
//! swell) levels, durations and start phase angles, and the ride-through/trip boundary
//! refined by bisection.
//!
//! The circuit is powered up and settled once ([`Settled`]); every point runs on a copy of
//! that state, so a point costs only its event and recovery. Points run in parallel on a
//! rayon pool; each returns a result or its failure, and the results come back in the
//! grid's order whatever the number of threads.

use rayon::prelude::*;
use serde::Serialize;

use crate::circuit::Circuit;
use crate::profile::{Duration, Profile, Step};
use crate::scenario::Settled;

pub mod journal;
pub mod report;
pub mod study;

/// The response class of one point.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Outcome {
    /// The point could not be simulated (see its failure reason).
    Failed,
    /// The load stayed connected.
    RidesThrough,
    /// The load was disconnected.
    Trips,
    /// The load path opened or closed more than once (see `docs/measurements.md`).
    Chatters,
}

/// One simulated point of a sweep.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Point {
    /// Level during the event, percent of nominal (below 100: a dip; above: a swell).
    pub level_pct: f64,
    /// Duration of the event, seconds.
    pub duration_s: f64,
    /// Start phase angle, degrees.
    pub phase_deg: f64,
    /// What happened.
    pub outcome: Outcome,
    /// Trip latency, milliseconds.
    pub trip_latency_ms: Option<f64>,
    /// Restore latency, milliseconds.
    pub restore_latency_ms: Option<f64>,
    /// The most output toggles of any one comparator (reported apart from chatter).
    pub comparator_toggles: usize,
    /// Why the point failed, if it did.
    pub failure: Option<String>,
}

/// The profile of a sweep point: a dip (or interruption) below 100%, a swell above.
pub fn point_profile(level_pct: f64, duration_s: f64, phase_deg: f64, edge_s: f64) -> Profile {
    let level = level_pct / 100.0;
    let duration = Duration::Seconds(duration_s);
    let step = if level > 1.0 {
        Step::Swell { level, duration }
    } else {
        Step::Dip {
            residual: level.max(0.0),
            duration,
        }
    };
    Profile {
        steps: vec![step],
        phase_deg,
        edge_s,
    }
}

/// Simulates one point from the settled protector.
pub fn run_point(
    settled: &Settled,
    circuit: &Circuit,
    level_pct: f64,
    duration_s: f64,
    phase_deg: f64,
    edge_s: f64,
) -> Point {
    let profile = point_profile(level_pct, duration_s, phase_deg, edge_s);
    match settled.run(circuit, &profile) {
        Ok(run) => {
            let m = &run.measurements;
            let outcome = if m.chatter {
                Outcome::Chatters
            } else if m.tripped {
                Outcome::Trips
            } else {
                Outcome::RidesThrough
            };
            Point {
                level_pct,
                duration_s,
                phase_deg,
                outcome,
                trip_latency_ms: m.trip_latency_ms,
                restore_latency_ms: m.restore_latency_ms,
                comparator_toggles: run
                    .comparator_toggles
                    .iter()
                    .map(|(_, n)| *n)
                    .max()
                    .unwrap_or(0),
                failure: None,
            }
        }
        Err(e) => Point {
            level_pct,
            duration_s,
            phase_deg,
            outcome: Outcome::Failed,
            trip_latency_ms: None,
            restore_latency_ms: None,
            comparator_toggles: 0,
            failure: Some(e.to_string()),
        },
    }
}

/// The grid of a sweep.
#[derive(Clone, Debug, PartialEq)]
pub struct Grid {
    /// Levels, percent of nominal.
    pub levels_pct: Vec<f64>,
    /// Durations, seconds.
    pub durations_s: Vec<f64>,
    /// Start phase angles, degrees.
    pub phases_deg: Vec<f64>,
}

impl Grid {
    /// Every (level, duration, phase) in order: level-major, then duration, then phase.
    pub fn points(&self) -> Vec<(f64, f64, f64)> {
        let mut out = Vec::with_capacity(
            self.levels_pct.len() * self.durations_s.len() * self.phases_deg.len(),
        );
        for &l in &self.levels_pct {
            for &d in &self.durations_s {
                for &p in &self.phases_deg {
                    out.push((l, d, p));
                }
            }
        }
        out
    }
}

/// `count` durations spaced evenly on a log scale from `first_s` to `last_s`.
pub fn log_durations(first_s: f64, last_s: f64, count: usize) -> Vec<f64> {
    if count <= 1 {
        return vec![first_s];
    }
    let ratio = (last_s / first_s).ln() / (count - 1) as f64;
    // The ends exactly as given, the rest between.
    (0..count)
        .map(|k| match k {
            0 => first_s,
            k if k == count - 1 => last_s,
            k => first_s * (ratio * k as f64).exp(),
        })
        .collect()
}

/// Runs every grid point in parallel, calling `progress` after each.
pub fn run_grid(
    settled: &Settled,
    circuit: &Circuit,
    grid: &Grid,
    edge_s: f64,
    progress: &(dyn Fn() + Sync),
) -> Vec<Point> {
    grid.points()
        .into_par_iter()
        .map(|(l, d, p)| {
            let point = run_point(settled, circuit, l, d, p, edge_s);
            progress();
            point
        })
        .collect()
}

/// One cell of the map: the worst case over the phase angles of a (level, duration).
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Cell {
    /// Level, percent of nominal.
    pub level_pct: f64,
    /// Duration, seconds.
    pub duration_s: f64,
    /// The most severe outcome over the phases (chatters > trips > rides through >
    /// failed).
    pub outcome: Outcome,
    /// The longest trip latency over the phases that tripped, milliseconds.
    pub trip_latency_ms: Option<f64>,
    /// The longest restore latency over the phases, milliseconds.
    pub restore_latency_ms: Option<f64>,
}

/// Reduces points to cells (worst case over phases), in grid order.
pub fn cells(points: &[Point]) -> Vec<Cell> {
    let mut out: Vec<Cell> = Vec::new();
    for p in points {
        let max = |a: Option<f64>, b: Option<f64>| match (a, b) {
            (Some(x), Some(y)) => Some(x.max(y)),
            (x, y) => x.or(y),
        };
        match out
            .iter_mut()
            .find(|c| c.level_pct == p.level_pct && c.duration_s == p.duration_s)
        {
            Some(c) => {
                c.outcome = c.outcome.max(p.outcome);
                c.trip_latency_ms = max(c.trip_latency_ms, p.trip_latency_ms);
                c.restore_latency_ms = max(c.restore_latency_ms, p.restore_latency_ms);
            }
            None => out.push(Cell {
                level_pct: p.level_pct,
                duration_s: p.duration_s,
                outcome: p.outcome,
                trip_latency_ms: p.trip_latency_ms,
                restore_latency_ms: p.restore_latency_ms,
            }),
        }
    }
    out
}

/// A point of the refined ride-through/trip boundary.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct BoundaryPoint {
    /// Duration, seconds.
    pub duration_s: f64,
    /// The boundary level, percent of nominal: for dips, the highest residual that still
    /// trips at some phase; for swells, the lowest level that trips at some phase. `None`
    /// when nothing in the searched range trips (or everything does).
    pub level_pct: Option<f64>,
    /// Half the width of the final bracket, percent of nominal.
    pub resolution_pct: f64,
}

/// Finds, by bisection within `[low_pct, high_pct]`, the level where the response changes
/// between trip and ride-through at duration `duration_s`, to within `resolution_pct`.
/// For dips (`high_pct` <= 100) deeper (lower) levels trip; for swells higher levels trip.
/// A point that cannot be simulated is an error, never taken for a ride-through.
pub fn refine_boundary(
    settled: &Settled,
    circuit: &Circuit,
    duration_s: f64,
    phases: &[f64],
    (low_pct, high_pct): (f64, f64),
    resolution_pct: f64,
    edge_s: f64,
) -> Result<BoundaryPoint, PointFailed> {
    let swell = low_pct >= 100.0;
    let trips_at = |level: f64| trips_anywhere(settled, circuit, level, duration_s, phases, edge_s);
    // `tripping` is the end that trips, `riding` the end that rides through.
    let (mut tripping, mut riding) = if swell {
        (high_pct, low_pct)
    } else {
        (low_pct, high_pct)
    };
    let none = BoundaryPoint {
        duration_s,
        level_pct: None,
        resolution_pct,
    };
    if !trips_at(tripping)? || trips_at(riding)? {
        return Ok(none);
    }
    while (riding - tripping).abs() > 2.0 * resolution_pct {
        let mid = 0.5 * (riding + tripping);
        if trips_at(mid)? {
            tripping = mid;
        } else {
            riding = mid;
        }
    }
    Ok(BoundaryPoint {
        duration_s,
        level_pct: Some(0.5 * (riding + tripping)),
        resolution_pct: 0.5 * (riding - tripping).abs(),
    })
}

/// How the search for the longest ride-through at one level ended.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum DurationSearch {
    /// Bracketed: rides through at `longest_ride_through_s`, trips at `shortest_trip_s`.
    Found,
    /// Rides through even the longest duration searched (the ride-through is at least
    /// that long).
    RidesThroughAll,
    /// Trips (or chatters) even at the shortest duration searched.
    TripsAtAll,
}

/// The other edge of the trip map: at one level, the longest event ridden through.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct DurationBoundaryPoint {
    /// Level, percent of nominal.
    pub level_pct: f64,
    /// The longest duration found to ride through at every phase, seconds: the lower end
    /// of the final bracket (a duration actually simulated). `None` if it trips at the
    /// shortest duration searched.
    pub longest_ride_through_s: Option<f64>,
    /// The shortest duration found to trip (or chatter) at some phase, seconds: the upper
    /// end of the bracket. `None` if it rides through the longest duration searched.
    pub shortest_trip_s: Option<f64>,
    /// How the search ended.
    pub status: DurationSearch,
    /// Simulated events the search took (each phase counts).
    pub runs: usize,
}

/// The resolution of the duration search: 1% of the duration or 0.5 ms, whichever is
/// larger.
pub fn duration_resolution_s(duration_s: f64) -> f64 {
    (0.01 * duration_s).max(0.5e-3)
}

/// A point a boundary search needed that could not be simulated: the search stops (a
/// failure is never taken for a ride-through).
#[derive(Clone, Debug, PartialEq, thiserror::Error)]
#[error("{level_pct}% for {duration_s} s at {phase_deg} deg: {reason}")]
pub struct PointFailed {
    /// Level, percent of nominal.
    pub level_pct: f64,
    /// Duration, seconds.
    pub duration_s: f64,
    /// Start phase angle, degrees.
    pub phase_deg: f64,
    /// Why the run failed.
    pub reason: String,
}

/// Whether any phase trips (or chatters) at (`level_pct`, `duration_s`); a point that
/// cannot be simulated is an error, never a ride-through.
fn trips_anywhere(
    settled: &Settled,
    circuit: &Circuit,
    level_pct: f64,
    duration_s: f64,
    phases: &[f64],
    edge_s: f64,
) -> Result<bool, PointFailed> {
    let points: Vec<Point> = phases
        .par_iter()
        .map(|&p| run_point(settled, circuit, level_pct, duration_s, p, edge_s))
        .collect();
    if let Some(p) = points.iter().find(|p| p.outcome == Outcome::Failed) {
        return Err(PointFailed {
            level_pct,
            duration_s,
            phase_deg: p.phase_deg,
            reason: p.failure.clone().unwrap_or_else(|| "failed".into()),
        });
    }
    Ok(points
        .iter()
        .any(|p| matches!(p.outcome, Outcome::Trips | Outcome::Chatters)))
}

/// Finds, by bisection in duration within `[shortest_s, longest_s]`, the longest event at
/// `level_pct` that the protector rides through at every phase, to
/// [`duration_resolution_s`]. `known` are map cells already simulated at this level over
/// the same phases (worst case over phases); they narrow the first bracket. A longer event
/// at the same level is taken to be at least as severe. The bisection is geometric (the
/// durations of a map span decades), ending when the bracket is within the resolution.
pub fn refine_duration_boundary(
    settled: &Settled,
    circuit: &Circuit,
    level_pct: f64,
    phases: &[f64],
    (shortest_s, longest_s): (f64, f64),
    known: &[Cell],
    edge_s: f64,
) -> Result<DurationBoundaryPoint, PointFailed> {
    let mut runs = 0;
    let mut test = |d: f64| {
        runs += phases.len();
        trips_anywhere(settled, circuit, level_pct, d, phases, edge_s)
    };
    let mine: Vec<&Cell> = known
        .iter()
        .filter(|c| c.level_pct == level_pct && c.outcome != Outcome::Failed)
        .collect();
    // The first bracket: the shortest known trip, and the longest known ride-through
    // below it; the ends of the range are simulated when nothing is known there.
    let mut trip = mine
        .iter()
        .filter(|c| matches!(c.outcome, Outcome::Trips | Outcome::Chatters))
        .map(|c| c.duration_s)
        .fold(f64::INFINITY, f64::min);
    let mut ride = mine
        .iter()
        .filter(|c| c.outcome == Outcome::RidesThrough && c.duration_s < trip)
        .map(|c| c.duration_s)
        .fold(f64::NEG_INFINITY, f64::max);
    if !trip.is_finite() {
        if test(longest_s)? {
            trip = longest_s;
        } else {
            return Ok(DurationBoundaryPoint {
                level_pct,
                longest_ride_through_s: Some(longest_s),
                shortest_trip_s: None,
                status: DurationSearch::RidesThroughAll,
                runs,
            });
        }
    }
    if !ride.is_finite() {
        if shortest_s < trip && !test(shortest_s)? {
            ride = shortest_s;
        } else {
            return Ok(DurationBoundaryPoint {
                level_pct,
                longest_ride_through_s: None,
                shortest_trip_s: Some(trip.min(shortest_s)),
                status: DurationSearch::TripsAtAll,
                runs,
            });
        }
    }
    while trip - ride > duration_resolution_s(ride) {
        let mid = (ride * trip)
            .sqrt()
            .clamp(ride + 0.25 * (trip - ride), trip - 0.25 * (trip - ride));
        if test(mid)? {
            trip = mid;
        } else {
            ride = mid;
        }
    }
    Ok(DurationBoundaryPoint {
        level_pct,
        longest_ride_through_s: Some(ride),
        shortest_trip_s: Some(trip),
        status: DurationSearch::Found,
        runs,
    })
}

/// Header of the duration boundary journal (`duration-boundary.csv`).
pub const DURATION_BOUNDARY_HEADER: &str =
    "level_pct,longest_ride_through_s,shortest_trip_s,status,runs";

fn search_name(s: DurationSearch) -> &'static str {
    match s {
        DurationSearch::Found => "found",
        DurationSearch::RidesThroughAll => "rides-through-all",
        DurationSearch::TripsAtAll => "trips-at-all",
    }
}

/// One line of the duration boundary journal.
pub fn duration_boundary_line(b: &DurationBoundaryPoint) -> String {
    format!(
        "{},{},{},{},{}",
        b.level_pct,
        optional(b.longest_ride_through_s),
        optional(b.shortest_trip_s),
        search_name(b.status),
        b.runs
    )
}

/// Reads a duration boundary journal line.
pub fn parse_duration_boundary_line(line: &str) -> Option<DurationBoundaryPoint> {
    let f: Vec<&str> = line.split(',').collect();
    if f.len() != 5 {
        return None;
    }
    let status = [
        DurationSearch::Found,
        DurationSearch::RidesThroughAll,
        DurationSearch::TripsAtAll,
    ]
    .into_iter()
    .find(|s| search_name(*s) == f[3])?;
    Some(DurationBoundaryPoint {
        level_pct: f[0].parse().ok()?,
        longest_ride_through_s: parse_optional(f[1])?,
        shortest_trip_s: parse_optional(f[2])?,
        status,
        runs: f[4].parse().ok()?,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn log_spacing_and_grid_order() {
        let d = log_durations(0.01, 10.0, 4);
        assert!((d[0] - 0.01).abs() < 1e-15);
        assert!((d[1] - 0.1).abs() < 1e-12);
        assert!((d[3] - 10.0).abs() < 1e-9);
        let g = Grid {
            levels_pct: vec![0.0, 50.0],
            durations_s: vec![0.1, 1.0],
            phases_deg: vec![0.0, 90.0],
        };
        let p = g.points();
        assert_eq!(p.len(), 8);
        assert_eq!(p[0], (0.0, 0.1, 0.0));
        assert_eq!(p[1], (0.0, 0.1, 90.0));
        assert_eq!(p[7], (50.0, 1.0, 90.0));
    }

    #[test]
    fn cells_take_the_worst_phase() {
        let point = |phase, outcome, trip| Point {
            level_pct: 40.0,
            duration_s: 0.2,
            phase_deg: phase,
            outcome,
            trip_latency_ms: trip,
            restore_latency_ms: None,
            comparator_toggles: 0,
            failure: None,
        };
        let c = cells(&[
            point(0.0, Outcome::RidesThrough, None),
            point(90.0, Outcome::Trips, Some(70.0)),
            point(180.0, Outcome::Trips, Some(75.0)),
        ]);
        assert_eq!(c.len(), 1);
        assert_eq!(c[0].outcome, Outcome::Trips);
        assert_eq!(c[0].trip_latency_ms, Some(75.0));
    }
}

/// Header of a points journal (`points.csv`).
pub const POINTS_HEADER: &str =
    "level_pct,duration_s,phase_deg,outcome,trip_latency_ms,restore_latency_ms,comparator_toggles,failure";

/// Header of a boundary journal (`boundary.csv`).
pub const BOUNDARY_HEADER: &str = "side,duration_s,level_pct,resolution_pct";

fn outcome_name(o: Outcome) -> &'static str {
    match o {
        Outcome::Failed => "failed",
        Outcome::RidesThrough => "rides-through",
        Outcome::Trips => "trips",
        Outcome::Chatters => "chatters",
    }
}

fn outcome_from(name: &str) -> Option<Outcome> {
    Some(match name {
        "failed" => Outcome::Failed,
        "rides-through" => Outcome::RidesThrough,
        "trips" => Outcome::Trips,
        "chatters" => Outcome::Chatters,
        _ => return None,
    })
}

fn optional(v: Option<f64>) -> String {
    v.map_or(String::new(), |v| v.to_string())
}

fn parse_optional(text: &str) -> Option<Option<f64>> {
    if text.is_empty() {
        Some(None)
    } else {
        text.parse().ok().map(Some)
    }
}

/// One line of the points journal. Numbers are written in full (shortest round-trip form),
/// so a resumed sweep recognises its points exactly.
pub fn point_line(p: &Point) -> String {
    format!(
        "{},{},{},{},{},{},{},{}",
        p.level_pct,
        p.duration_s,
        p.phase_deg,
        outcome_name(p.outcome),
        optional(p.trip_latency_ms),
        optional(p.restore_latency_ms),
        p.comparator_toggles,
        p.failure
            .as_deref()
            .unwrap_or("")
            .replace([',', '\n', '\r'], ";")
    )
}

/// Reads a journal line; `None` for a malformed (for example half-written) line.
pub fn parse_point_line(line: &str) -> Option<Point> {
    let f: Vec<&str> = line.splitn(8, ',').collect();
    if f.len() != 8 {
        return None;
    }
    Some(Point {
        level_pct: f[0].parse().ok()?,
        duration_s: f[1].parse().ok()?,
        phase_deg: f[2].parse().ok()?,
        outcome: outcome_from(f[3])?,
        trip_latency_ms: parse_optional(f[4])?,
        restore_latency_ms: parse_optional(f[5])?,
        comparator_toggles: f[6].parse().ok()?,
        failure: (!f[7].is_empty()).then(|| f[7].to_string()),
    })
}

/// One line of the boundary journal.
pub fn boundary_line(side: &str, b: &BoundaryPoint) -> String {
    format!(
        "{side},{},{},{}",
        b.duration_s,
        optional(b.level_pct),
        b.resolution_pct
    )
}

/// Reads a boundary journal line: (side, point).
pub fn parse_boundary_line(line: &str) -> Option<(String, BoundaryPoint)> {
    let f: Vec<&str> = line.split(',').collect();
    if f.len() != 4 || !(f[0] == "dip" || f[0] == "swell") {
        return None;
    }
    Some((
        f[0].to_string(),
        BoundaryPoint {
            duration_s: f[1].parse().ok()?,
            level_pct: parse_optional(f[2])?,
            resolution_pct: f[3].parse().ok()?,
        },
    ))
}

/// Runs `list` in parallel, calling `done` with each point as it completes (from whichever
/// thread ran it); returns the points in `list`'s order.
pub fn run_points(
    settled: &Settled,
    circuit: &Circuit,
    list: &[(f64, f64, f64)],
    edge_s: f64,
    done: &(dyn Fn(&Point) + Sync),
) -> Vec<Point> {
    list.par_iter()
        .map(|&(l, d, p)| {
            let point = run_point(settled, circuit, l, d, p, edge_s);
            done(&point);
            point
        })
        .collect()
}

/// One share of a study split over several machines: share `index` (1-based) of `count`.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Shard {
    /// Which share, from 1.
    pub index: usize,
    /// How many shares.
    pub count: usize,
}

impl Shard {
    /// The whole study, unsplit.
    pub const WHOLE: Shard = Shard { index: 1, count: 1 };
}

impl std::fmt::Display for Shard {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "{}/{}", self.index, self.count)
    }
}

/// The share `k` (1-based) of `n` of a list: every `n`-th item starting at `k - 1`. The same
/// grid always splits the same way.
pub fn shard<T: Clone>(items: &[T], k: usize, n: usize) -> Vec<T> {
    items
        .iter()
        .enumerate()
        .filter(|(i, _)| n <= 1 || i % n == k.saturating_sub(1) % n)
        .map(|(_, x)| x.clone())
        .collect()
}

/// Puts points in the grid's order (level, then duration, then phase), dropping duplicates.
pub fn in_grid_order(grid: &Grid, points: &[Point]) -> Vec<Point> {
    grid.points()
        .into_iter()
        .filter_map(|(l, d, p)| {
            points
                .iter()
                .find(|x| x.level_pct == l && x.duration_s == d && x.phase_deg == p)
                .cloned()
        })
        .collect()
}

#[cfg(test)]
mod journal_tests {
    use super::*;

    #[test]
    fn journal_lines_round_trip() {
        let p = Point {
            level_pct: 40.0,
            duration_s: 0.123_456_789_012_345,
            phase_deg: 90.0,
            outcome: Outcome::Trips,
            trip_latency_ms: Some(66.02),
            restore_latency_ms: None,
            comparator_toggles: 4,
            failure: None,
        };
        assert_eq!(parse_point_line(&point_line(&p)), Some(p.clone()));
        let f = Point {
            outcome: Outcome::Failed,
            failure: Some("no convergence, at t = 1 s\nsecond line".into()),
            ..p
        };
        let back = parse_point_line(&point_line(&f)).unwrap();
        assert_eq!(
            back.failure.as_deref(),
            Some("no convergence; at t = 1 s;second line")
        );
        // A half-written line is not a point.
        assert_eq!(parse_point_line("40,0.12,90,tri"), None);
        let b = BoundaryPoint {
            duration_s: 0.2,
            level_pct: Some(86.7),
            resolution_pct: 0.25,
        };
        assert_eq!(
            parse_boundary_line(&boundary_line("dip", &b)),
            Some(("dip".into(), b))
        );
    }

    #[test]
    fn shards_partition_the_grid() {
        let items: Vec<usize> = (0..10).collect();
        let mut all: Vec<usize> = (1..=3).flat_map(|k| shard(&items, k, 3)).collect();
        all.sort_unstable();
        assert_eq!(all, items);
        assert_eq!(shard(&items, 2, 3), vec![1, 4, 7]);
    }
}
