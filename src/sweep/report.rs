//! The report of a sweep: its JSON object (`sweep.json`), the data of its map and its text
//! (the map as characters, the boundaries, the longest ride-through).

use std::fmt::Write as _;
use std::path::Path;

use super::{
    cells, in_grid_order, BoundaryPoint, Cell, DurationBoundaryPoint, Grid, Outcome, Point,
};

/// Everything a sweep report shows.
pub struct Report<'a> {
    /// The circuit's name (its file, or the built-in guard).
    pub name: &'a str,
    /// The circuit's title.
    pub title: &'a str,
    /// The grid.
    pub grid: &'a Grid,
    /// The points (any order).
    pub points: &'a [Point],
    /// The level boundary points with their side.
    pub boundaries: &'a [(String, BoundaryPoint)],
    /// The longest ride-through per level.
    pub duration_boundary: &'a [DurationBoundaryPoint],
    /// Supply frequency, hertz.
    pub frequency_hz: f64,
    /// The level boundary's resolution, percent.
    pub resolution_pct: f64,
    /// The shard, (K, N).
    pub shard: super::Shard,
    /// Wall time, seconds.
    pub wall_s: f64,
    /// Wall time of the one power-up all points share.
    pub settle_wall_s: Option<f64>,
}

/// What a report's map and text are made of, sorted.
pub struct Sorted {
    /// The points in grid order.
    pub points: Vec<Point>,
    /// The cells (worst case over phases).
    pub cells: Vec<Cell>,
    /// The dip boundary by duration.
    pub dips: Vec<BoundaryPoint>,
    /// The swell boundary by duration.
    pub swells: Vec<BoundaryPoint>,
    /// The longest ride-through by level.
    pub longest: Vec<DurationBoundaryPoint>,
}

/// A duration as a map column heading: `20ms`, `1.5s`.
pub fn short_duration(s: f64) -> String {
    if s < 1.0 {
        format!("{:.0}ms", s * 1e3)
    } else {
        format!("{s:.1}s")
    }
}

impl<'a> Report<'a> {
    /// The report's data, sorted for the map and the text.
    pub fn sorted(&self) -> Sorted {
        let points = in_grid_order(self.grid, self.points);
        let map = cells(&points);
        let side = |s: &str| -> Vec<BoundaryPoint> {
            let mut list: Vec<_> = self
                .boundaries
                .iter()
                .filter(|(x, _)| x == s)
                .map(|(_, b)| b.clone())
                .collect();
            list.sort_by(|a, b| a.duration_s.total_cmp(&b.duration_s));
            list
        };
        let mut longest = self.duration_boundary.to_vec();
        longest.sort_by(|a, b| a.level_pct.total_cmp(&b.level_pct));
        Sorted {
            cells: map,
            points,
            dips: side("dip"),
            swells: side("swell"),
            longest,
        }
    }

    /// The JSON object of `sweep.json` and `--json`.
    pub fn json(&self) -> serde_json::Value {
        let r = self;
        let s = self.sorted();
        serde_json::json!({
            "circuit": r.name,
            "title": r.title,
            "frequency_hz": r.frequency_hz,
            "shard": r.shard.to_string(),
            "points": s.points,
            "cells": s.cells,
            "dip_boundary": s.dips,
            "swell_boundary": s.swells,
            "duration_boundary": s.longest,
            "wall_time_s": r.wall_s,
            "power_up_wall_time_s": r.settle_wall_s,
        })
    }

    /// The map's drawing data.
    pub fn map_data<'s>(&self, s: &'s Sorted, levels: &'s [f64]) -> crate::plot::MapData<'s>
    where
        'a: 's,
    {
        crate::plot::MapData {
            title: format!("Trip map: {} ({})", self.title, self.name),
            cells: &s.cells,
            durations_s: &self.grid.durations_s,
            levels_pct: levels,
            boundaries: vec![&s.dips, &s.swells],
            duration_boundary: &s.longest,
            frequency_hz: self.frequency_hz,
        }
    }

    /// The text report; `out_dir` and `plot` are named at its end when given.
    pub fn text(&self, out_dir: Option<&Path>, plot: Option<&Path>) -> String {
        let r = self;
        let mut out = String::new();
        let Sorted {
            points,
            cells: map,
            dips,
            swells,
            longest,
        } = self.sorted();
        let failed = points
            .iter()
            .filter(|p| p.outcome == Outcome::Failed)
            .count();
        say!(out, "{}: {}", r.name, r.title);
        say!(
            out,
            "{} points ({} levels x {} durations x {} phases{}) in {:.1} s{}",
            points.len(),
            r.grid.levels_pct.len(),
            r.grid.durations_s.len(),
            r.grid.phases_deg.len(),
            if r.shard.count > 1 {
                format!(", shard {} of {}", r.shard.index, r.shard.count)
            } else {
                String::new()
            },
            r.wall_s,
            if failed > 0 {
                format!(", {failed} FAILED")
            } else {
                String::new()
            }
        );
        if let Some(settle) = r.settle_wall_s {
            say!(
                out,
                "one shared power-up took {settle:.2} s; every point ran from its settled state"
            );
        }
        say!(
            out,
            "\nworst case over phases: . rides through, T trips, C chatters, ! failed, blank not run\n"
        );
        self.map_lines(&mut out, &map);
        for (side, list) in [("dip", &dips), ("swell", &swells)] {
            self.boundary_lines(&mut out, side, list);
        }
        if !longest.is_empty() {
            longest_lines(&mut out, &longest);
        }
        if let Some(dir) = out_dir {
            say!(
                out,
                "\nwritten: {}/points.csv, boundary.csv, duration-boundary.csv, sweep.json",
                dir.display()
            );
        }
        if let Some(path) = plot {
            say!(out, "map: {}", path.display());
        }
        out
    }

    /// The map as characters, worst case over phases, highest level first.
    fn map_lines(&self, out: &mut String, map: &[Cell]) {
        let r = self;
        let mut header = format!("{:>8} ", "level");
        for d in &r.grid.durations_s {
            header += &format!("{:>8}", short_duration(*d));
        }
        say!(out, "{header}");
        let mut levels = r.grid.levels_pct.clone();
        levels.sort_by(|a, b| b.total_cmp(a));
        for l in levels {
            let mut row = format!("{l:>7}% ");
            for &d in &r.grid.durations_s {
                let c = map.iter().find(|c| c.level_pct == l && c.duration_s == d);
                let mark = match c.map(|c| (c.outcome, c.trip_latency_ms)) {
                    Some((Outcome::Trips, Some(t))) => format!("T{t:.0}"),
                    Some((Outcome::Trips, None)) => "T".into(),
                    Some((Outcome::Chatters, _)) => "C".into(),
                    Some((Outcome::RidesThrough, _)) => ".".into(),
                    Some((Outcome::Failed, _)) => "!".into(),
                    None => String::new(),
                };
                row += &format!("{mark:>8}");
            }
            say!(out, "{row}");
        }
        say!(
            out,
            "(T followed by the longest trip latency over the phases, ms)"
        );
    }

    /// One side's level boundary by duration.
    fn boundary_lines(&self, out: &mut String, side: &str, list: &[BoundaryPoint]) {
        if list.is_empty() {
            return;
        }
        say!(
            out,
            "\n{side} boundary (refined to +/- {} % of nominal):",
            self.resolution_pct
        );
        for b in list {
            match b.level_pct {
                Some(l) => {
                    say!(out, "  {:>10}  {:6.2} %", short_duration(b.duration_s), l);
                }
                None => {
                    say!(out, "  {:>10}  none in range", short_duration(b.duration_s));
                }
            }
        }
    }
}

/// The longest ride-through by level.
fn longest_lines(out: &mut String, longest: &[DurationBoundaryPoint]) {
    use super::DurationSearch;
    say!(
        out,
        "\nlongest event ridden through at every phase (refined to 1% of the duration or 0.5 ms):"
    );
    for b in longest {
        let text = match (b.status, b.longest_ride_through_s, b.shortest_trip_s) {
            (DurationSearch::Found, Some(ride), Some(trip)) => format!(
                "{} (trips at {})",
                crate::units::format_duration(ride),
                crate::units::format_duration(trip)
            ),
            (DurationSearch::RidesThroughAll, Some(ride), _) => {
                format!(
                    "at least {} (the longest searched)",
                    crate::units::format_duration(ride)
                )
            }
            (_, _, Some(trip)) => {
                format!(
                    "none: trips at {} (the shortest searched)",
                    crate::units::format_duration(trip)
                )
            }
            _ => "-".into(),
        };
        say!(out, "  {:>7}%  {text}", b.level_pct);
    }
}
