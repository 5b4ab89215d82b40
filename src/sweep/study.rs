//! A whole sweep study: the grid's points of one shard, then the level boundary at each of
//! its durations and the longest ride-through at each of its levels, each skipped where a
//! journal already holds it and appended to the journal as it completes.

use crate::circuit::Circuit;
use crate::scenario::Settled;

use super::journal::{Contents, Journal};
use super::{
    refine_boundary, refine_duration_boundary, run_points, shard, BoundaryPoint,
    DurationBoundaryPoint, Grid, Point, Shard,
};

/// What a study runs.
#[derive(Clone, Debug, PartialEq)]
pub struct StudySettings {
    /// The grid: levels (dips below 100%, swells above), durations and phases.
    pub grid: Grid,
    /// The level boundary's resolution, percent of nominal.
    pub resolution_pct: f64,
    /// Whether to refine the boundaries (level and duration) after the points.
    pub refine: bool,
    /// This run's share of the study: (K, N), the K-th of N (1-based).
    pub shard: Shard,
    /// Rise and fall time of the events' edges, seconds.
    pub edge_s: f64,
    /// Whether the points were simulated cycle by cycle with no shortcut (the settled
    /// protector's `EventOptions::skip_steady` off); recorded so that a resume or merge
    /// does not mix the two.
    pub full_steps: bool,
}

impl StudySettings {
    /// The settings a journal folder records (the circuit's name, title and a digest of
    /// its file's text, and the supply with them): a resumed or merged study must match
    /// them, so a circuit file edited at the same path cannot join its points to the old
    /// circuit's.
    pub fn journal_settings(
        &self,
        circuit_name: &str,
        circuit_title: &str,
        circuit_text: &str,
        nominal_rms_v: f64,
        frequency_hz: f64,
    ) -> serde_json::Value {
        let mut settings = serde_json::json!({
            "circuit": circuit_name,
            "title": circuit_title,
            "circuit_digest": format!("{:016x}", fnv1a(circuit_text.as_bytes())),
            "nominal_rms_v": nominal_rms_v,
            "frequency_hz": frequency_hz,
            "levels_pct": self.grid.levels_pct,
            "swells": self.grid.levels_pct.iter().any(|&l| l > 100.0),
            "durations_s": self.grid.durations_s,
            "phases_deg": self.grid.phases_deg,
            "resolution_pct": self.resolution_pct,
            "refine": self.refine,
            "shard": self.shard.to_string(),
        });
        if self.full_steps {
            settings["full_steps"] = serde_json::json!(true);
        }
        settings
    }
}

/// The 64-bit FNV-1a digest of `bytes` (Fowler, Noll and Vo; published constants): a
/// fingerprint of a circuit file, stable across builds and platforms.
pub fn fnv1a(bytes: &[u8]) -> u64 {
    let mut hash: u64 = 0xcbf2_9ce4_8422_2325;
    for &b in bytes {
        hash ^= u64::from(b);
        hash = hash.wrapping_mul(0x0000_0100_0000_01b3);
    }
    hash
}

/// Why a study stopped.
#[derive(Clone, Debug, PartialEq, thiserror::Error)]
pub enum StudyError {
    /// A level boundary search met a point that could not be simulated.
    #[error("{side} boundary at {duration_s} s: {failed}")]
    Boundary {
        /// `dip` or `swell`.
        side: String,
        /// The duration searched, seconds.
        duration_s: f64,
        /// The point that failed.
        failed: super::PointFailed,
    },
    /// A longest ride-through search met a point that could not be simulated.
    #[error("longest ride-through at {level_pct}%: {failed}")]
    RideThrough {
        /// The level searched, percent.
        level_pct: f64,
        /// The point that failed.
        failed: super::PointFailed,
    },
}

/// What a study found (with what a journal held before).
#[derive(Clone, Debug, Default)]
pub struct StudyResult {
    /// Every point of the shard.
    pub points: Vec<Point>,
    /// The level boundary points, with their side.
    pub boundaries: Vec<(String, BoundaryPoint)>,
    /// The longest ride-through per level.
    pub durations: Vec<DurationBoundaryPoint>,
}

/// Runs the study on the settled protector: the points of this shard not in `done`, then
/// (with `refine`) the boundaries. Each result goes to `journal` as it completes.
pub fn run_study(
    settled: &Settled,
    circuit: &Circuit,
    settings: &StudySettings,
    journal: Option<&Journal>,
    done: Contents,
    progress: &dyn crate::progress::Progress,
) -> Result<StudyResult, StudyError> {
    let grid = &settings.grid;
    let Shard { index: k, count: n } = settings.shard;
    let todo: Vec<(f64, f64, f64)> = shard(&grid.points(), k, n)
        .into_iter()
        .filter(|&(l, d, p)| {
            !done
                .points
                .iter()
                .any(|x| x.level_pct == l && x.duration_s == d && x.phase_deg == p)
        })
        .collect();
    progress.stage("points", todo.len());
    let fresh = run_points(settled, circuit, &todo, settings.edge_s, &|p| {
        if let Some(j) = journal {
            j.point(p);
        }
        progress.done();
    });
    let mut points = done.points;
    points.extend(fresh);
    let mut boundaries = done.boundaries;
    let mut durations = done.durations;
    if !settings.refine {
        return Ok(StudyResult {
            points,
            boundaries,
            durations,
        });
    }

    let level_todo = level_searches(grid, (k, n), &boundaries);
    let duration_todo: Vec<f64> = shard(&grid.levels_pct, k, n)
        .into_iter()
        .filter(|l| !durations.iter().any(|b| b.level_pct == *l))
        .collect();
    progress.stage("boundaries", level_todo.len() + duration_todo.len());
    for (side, range, d) in level_todo {
        progress.item(&format!(
            "{side} level at {}",
            crate::units::format_duration(d)
        ));
        let b = refine_boundary(
            settled,
            circuit,
            d,
            &grid.phases_deg,
            range,
            settings.resolution_pct,
            settings.edge_s,
        )
        .map_err(|failed| StudyError::Boundary {
            side: side.to_string(),
            duration_s: d,
            failed,
        })?;
        if let Some(j) = journal {
            j.boundary(side, &b);
        }
        boundaries.push((side.to_string(), b));
        progress.done();
    }
    // The search starts from the range's ends, not from the map's cells: a shard holds
    // only some of them, and a search from another bracket ends on other (equally valid)
    // durations, so sharded and whole studies would differ.
    let range = (
        grid.durations_s
            .iter()
            .copied()
            .fold(f64::INFINITY, f64::min),
        grid.durations_s.iter().copied().fold(0.0, f64::max),
    );
    for level in duration_todo {
        progress.item(&format!("longest ride-through at {level}%"));
        let b = refine_duration_boundary(
            settled,
            circuit,
            level,
            &grid.phases_deg,
            range,
            &[],
            settings.edge_s,
        )
        .map_err(|failed| StudyError::RideThrough {
            level_pct: level,
            failed,
        })?;
        if let Some(j) = journal {
            j.duration(&b);
        }
        durations.push(b);
        progress.done();
    }
    Ok(StudyResult {
        points,
        boundaries,
        durations,
    })
}

/// The level boundary searches a shard still has to run: (side, level range, duration), for
/// the dips and, if the grid has swells, the swells.
fn level_searches(
    grid: &Grid,
    (k, n): (usize, usize),
    boundaries: &[(String, BoundaryPoint)],
) -> Vec<(&'static str, (f64, f64), f64)> {
    let swell_top = grid
        .levels_pct
        .iter()
        .copied()
        .filter(|&l| l > 100.0)
        .fold(None, |m: Option<f64>, l| Some(m.map_or(l, |m| m.max(l))));
    let mut sides: Vec<(&str, (f64, f64))> = vec![("dip", (0.0, 100.0))];
    if let Some(top) = swell_top {
        sides.push(("swell", (100.0, top)));
    }
    let my_durations = shard(&grid.durations_s, k, n);
    sides
        .iter()
        .flat_map(|&(side, range)| my_durations.iter().map(move |&d| (side, range, d)))
        .filter(|(side, _, d)| {
            !boundaries
                .iter()
                .any(|(s, b)| s == side && b.duration_s == *d)
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::fnv1a;

    #[test]
    fn fnv1a_matches_the_published_test_vectors() {
        // FNV-1a 64-bit test vectors (Fowler, Noll and Vo), from memory.
        assert_eq!(fnv1a(b""), 0xcbf2_9ce4_8422_2325);
        assert_eq!(fnv1a(b"a"), 0xaf63_dc4c_8601_ec8c);
        assert_eq!(fnv1a(b"foobar"), 0x8594_4171_f739_67e8);
    }
}
