//! The journal of a sweep in a folder: its settings (`sweep-settings.json`), and the points
//! and boundary points appended as they complete (`points.csv`, `boundary.csv`,
//! `duration-boundary.csv`), so that an interrupted sweep loses nothing and resumes; and the
//! merge of the folders of a sharded sweep into one.

use std::fs::{File, OpenOptions};
use std::io::Write as _;
use std::path::{Path, PathBuf};
use std::sync::Mutex;

use crate::output::write_atomic;

use super::{
    boundary_line, duration_boundary_line, in_grid_order, parse_boundary_line,
    parse_duration_boundary_line, parse_point_line, point_line, BoundaryPoint,
    DurationBoundaryPoint, Grid, Point, BOUNDARY_HEADER, DURATION_BOUNDARY_HEADER, POINTS_HEADER,
};

/// The settings file of a journal folder.
pub const SETTINGS_FILE: &str = "sweep-settings.json";

/// Why a journal could not be opened, read or written.
#[derive(Debug, thiserror::Error)]
pub enum JournalError {
    /// A file or folder could not be created, read or written.
    #[error("cannot {action} {}: {source}", path.display())]
    Io {
        /// What was being done: `create`, `read`, `write`, `open`.
        action: &'static str,
        /// The file or folder.
        path: PathBuf,
        /// The system's reason.
        source: std::io::Error,
    },
    /// A settings file that is not valid JSON.
    #[error("{}: {message}", path.display())]
    BadSettings {
        /// The settings file.
        path: PathBuf,
        /// What is wrong.
        message: String,
    },
    /// The folder holds a sweep already, and resuming was not asked for.
    #[error("{} already holds a sweep", dir.display())]
    Occupied {
        /// The folder.
        dir: PathBuf,
    },
    /// The folder holds a sweep with other settings than the one asked for.
    #[error("{} holds a sweep with other settings", dir.display())]
    OtherSettings {
        /// The folder.
        dir: PathBuf,
    },
    /// Folders to merge that do not hold shards of one sweep.
    #[error("{} holds a sweep with other settings than {}: only shards of one sweep merge", dir.display(), first.display())]
    NotShardsOfOne {
        /// The folder that differs.
        dir: PathBuf,
        /// The first folder.
        first: PathBuf,
    },
    /// Nothing to merge.
    #[error("merge needs at least one folder")]
    NoFolders,
    /// The same folder given twice.
    #[error("{} is given more than once", dir.display())]
    Repeated {
        /// The folder.
        dir: PathBuf,
    },
    /// Two folders hold the same grid point with different results.
    #[error("{} and an earlier folder hold {level_pct}% for {duration_s} s at {phase_deg} deg with different results", dir.display())]
    Disagree {
        /// The folder where the second result was found.
        dir: PathBuf,
        /// The point's level, percent.
        level_pct: f64,
        /// Its duration, seconds.
        duration_s: f64,
        /// Its phase, degrees.
        phase_deg: f64,
    },
}

fn io<'a>(
    action: &'static str,
    path: &'a Path,
) -> impl FnOnce(std::io::Error) -> JournalError + 'a {
    move |source| JournalError::Io {
        action,
        path: path.to_path_buf(),
        source,
    }
}

/// What a journal folder holds: the completed points and boundary points.
#[derive(Clone, Debug, Default)]
pub struct Contents {
    /// Completed points, in journal order.
    pub points: Vec<Point>,
    /// Completed level boundary points, with their side (`dip` or `swell`).
    pub boundaries: Vec<(String, BoundaryPoint)>,
    /// Completed longest ride-through searches.
    pub durations: Vec<DurationBoundaryPoint>,
}

/// An open journal: appends each result as it completes (from any thread).
pub struct Journal {
    points: Mutex<File>,
    boundary: Mutex<File>,
    duration_boundary: Mutex<File>,
}

impl Journal {
    /// Opens `dir` for a sweep with `settings`: a fresh folder, or with `resume` one holding
    /// the same sweep, whose completed points and boundary points are returned. A last line
    /// cut short by a kill (no newline at its end) is dropped from the file, so the next
    /// line starts on a line of its own, and its point runs again.
    pub fn open(
        dir: &Path,
        settings: &serde_json::Value,
        resume: bool,
    ) -> Result<(Journal, Contents), JournalError> {
        std::fs::create_dir_all(dir).map_err(io("create", dir))?;
        let settings_path = dir.join(SETTINGS_FILE);
        let contents = if settings_path.exists() {
            if !resume {
                return Err(JournalError::Occupied {
                    dir: dir.to_path_buf(),
                });
            }
            if &read_settings(&settings_path)? != settings {
                return Err(JournalError::OtherSettings {
                    dir: dir.to_path_buf(),
                });
            }
            for name in ["points.csv", "boundary.csv", "duration-boundary.csv"] {
                drop_torn_line(&dir.join(name))?;
            }
            read_contents(dir)
        } else {
            write_atomic(&settings_path, |w| {
                w.write_all(
                    serde_json::to_string_pretty(settings)
                        .unwrap_or_default()
                        .as_bytes(),
                )
            })
            .map_err(io("write", &settings_path))?;
            Contents::default()
        };
        let open = |name: &str, header: &str| -> Result<Mutex<File>, JournalError> {
            let path = dir.join(name);
            let fresh = !path.exists();
            let mut file = OpenOptions::new()
                .create(true)
                .append(true)
                .open(&path)
                .map_err(io("open", &path))?;
            if fresh {
                writeln!(file, "{header}").map_err(io("write", &path))?;
            }
            Ok(Mutex::new(file))
        };
        Ok((
            Journal {
                points: open("points.csv", POINTS_HEADER)?,
                boundary: open("boundary.csv", BOUNDARY_HEADER)?,
                duration_boundary: open("duration-boundary.csv", DURATION_BOUNDARY_HEADER)?,
            },
            contents,
        ))
    }

    /// Appends a completed point.
    pub fn point(&self, p: &Point) {
        append(&self.points, &point_line(p));
    }

    /// Appends a completed level boundary point of `side` (`dip` or `swell`).
    pub fn boundary(&self, side: &str, b: &BoundaryPoint) {
        append(&self.boundary, &boundary_line(side, b));
    }

    /// Appends a completed longest ride-through search.
    pub fn duration(&self, b: &DurationBoundaryPoint) {
        append(&self.duration_boundary, &duration_boundary_line(b));
    }
}

fn append(file: &Mutex<File>, line: &str) {
    if let Ok(mut f) = file.lock() {
        // A failed append only costs the point on a later resume.
        let _ = writeln!(f, "{line}").and_then(|()| f.flush());
    }
}

/// Removes a last line without its newline (written when the process was killed).
fn drop_torn_line(path: &Path) -> Result<(), JournalError> {
    let Ok(text) = std::fs::read_to_string(path) else {
        return Ok(());
    };
    if text.is_empty() || text.ends_with('\n') {
        return Ok(());
    }
    let keep = text.rfind('\n').map_or(0, |i| i + 1);
    write_atomic(path, |w| w.write_all(&text.as_bytes()[..keep])).map_err(io("write", path))
}

fn read_settings(path: &Path) -> Result<serde_json::Value, JournalError> {
    let text = std::fs::read_to_string(path).map_err(io("read", path))?;
    serde_json::from_str(&text).map_err(|e| JournalError::BadSettings {
        path: path.to_path_buf(),
        message: e.to_string(),
    })
}

/// The lines after the header of a journal file, or none.
fn read_lines(path: &Path) -> Vec<String> {
    std::fs::read_to_string(path)
        .map(|t| t.lines().skip(1).map(String::from).collect())
        .unwrap_or_default()
}

/// The completed results in a journal folder (lines that do not read are skipped).
pub fn read_contents(dir: &Path) -> Contents {
    Contents {
        points: read_lines(&dir.join("points.csv"))
            .iter()
            .filter_map(|l| parse_point_line(l))
            .collect(),
        boundaries: read_lines(&dir.join("boundary.csv"))
            .iter()
            .filter_map(|l| parse_boundary_line(l))
            .collect(),
        durations: read_lines(&dir.join("duration-boundary.csv"))
            .iter()
            .filter_map(|l| parse_duration_boundary_line(l))
            .collect(),
    }
}

/// The folders of a sharded sweep joined into one.
#[derive(Clone, Debug)]
pub struct Merged {
    /// The settings they share (without the shard).
    pub settings: serde_json::Value,
    /// The grid of the settings.
    pub grid: Grid,
    /// The points in grid order.
    pub points: Vec<Point>,
    /// The level boundary points of every shard.
    pub boundaries: Vec<(String, BoundaryPoint)>,
    /// The longest ride-through searches of every shard, by level.
    pub durations: Vec<DurationBoundaryPoint>,
    /// Grid points in none of the folders.
    pub missing: usize,
}

/// Joins the journal folders of the shards of one sweep.
pub fn merge(folders: &[PathBuf]) -> Result<Merged, JournalError> {
    let first = folders.first().ok_or(JournalError::NoFolders)?;
    let mut settings: Option<serde_json::Value> = None;
    let mut all = Contents::default();
    let mut seen: Vec<PathBuf> = Vec::new();
    for dir in folders {
        let resolved = std::fs::canonicalize(dir).unwrap_or_else(|_| dir.clone());
        if seen.contains(&resolved) {
            return Err(JournalError::Repeated { dir: dir.clone() });
        }
        seen.push(resolved);
        let mut s = read_settings(&dir.join(SETTINGS_FILE))?;
        if let serde_json::Value::Object(m) = &mut s {
            m.remove("shard");
        }
        match &settings {
            None => settings = Some(s),
            Some(f) if *f != s => {
                return Err(JournalError::NotShardsOfOne {
                    dir: dir.clone(),
                    first: first.clone(),
                })
            }
            Some(_) => {}
        }
        let c = read_contents(dir);
        // A point in two folders (a shard with the whole sweep, overlapping shards) is kept
        // once, and only if both hold the same result.
        for p in &c.points {
            if let Some(q) = all.points.iter().find(|q| {
                q.level_pct == p.level_pct
                    && q.duration_s == p.duration_s
                    && q.phase_deg == p.phase_deg
            }) {
                if point_line(q) != point_line(p) {
                    return Err(JournalError::Disagree {
                        dir: dir.clone(),
                        level_pct: p.level_pct,
                        duration_s: p.duration_s,
                        phase_deg: p.phase_deg,
                    });
                }
            }
        }
        all.points.extend(c.points);
        all.boundaries.extend(c.boundaries);
        all.durations.extend(c.durations);
    }
    let settings = settings.ok_or(JournalError::NoFolders)?;
    let numbers = |key: &str| -> Vec<f64> {
        settings[key]
            .as_array()
            .map(|a| a.iter().filter_map(serde_json::Value::as_f64).collect())
            .unwrap_or_default()
    };
    let grid = Grid {
        levels_pct: numbers("levels_pct"),
        durations_s: numbers("durations_s"),
        phases_deg: numbers("phases_deg"),
    };
    let (points, boundaries, durations) = canonical(&grid, all);
    Ok(Merged {
        missing: grid.points().len().saturating_sub(points.len()),
        settings,
        grid,
        points,
        boundaries,
        durations,
    })
}

/// A study's results in their one order, whatever order they completed in: points in grid
/// order, level boundary points by side then duration, the longest ride-through by level;
/// each once (a result found twice, in overlapping folders, is kept once).
pub fn canonical(
    grid: &Grid,
    all: Contents,
) -> (
    Vec<Point>,
    Vec<(String, BoundaryPoint)>,
    Vec<DurationBoundaryPoint>,
) {
    let points = in_grid_order(grid, &all.points);
    let mut boundaries: Vec<(String, BoundaryPoint)> = Vec::new();
    for (side, b) in all.boundaries {
        if !boundaries
            .iter()
            .any(|(s, x)| *s == side && x.duration_s == b.duration_s)
        {
            boundaries.push((side, b));
        }
    }
    boundaries.sort_by(|(s, a), (t, b)| s.cmp(t).then(a.duration_s.total_cmp(&b.duration_s)));
    let mut durations: Vec<DurationBoundaryPoint> = Vec::new();
    for d in all.durations {
        if !durations.iter().any(|x| x.level_pct == d.level_pct) {
            durations.push(d);
        }
    }
    durations.sort_by(|a, b| a.level_pct.total_cmp(&b.level_pct));
    (points, boundaries, durations)
}

/// Rewrites a finished study's journal files in their one order (see [`canonical`]), so
/// that a resumed, a sharded and merged, and an uninterrupted study give the same files.
pub fn finish(
    dir: &Path,
    settings: serde_json::Value,
    grid: &Grid,
    all: Contents,
) -> Result<Merged, JournalError> {
    let (points, boundaries, durations) = canonical(grid, all);
    let merged = Merged {
        missing: grid.points().len().saturating_sub(points.len()),
        settings,
        grid: grid.clone(),
        points,
        boundaries,
        durations,
    };
    write_merged(dir, &merged)?;
    Ok(merged)
}

/// Writes `points.csv`, `boundary.csv` and `duration-boundary.csv` of a merged sweep into
/// `dir`, each whole or not at all.
pub fn write_merged(dir: &Path, merged: &Merged) -> Result<(), JournalError> {
    std::fs::create_dir_all(dir).map_err(io("create", dir))?;
    let path = dir.join("points.csv");
    write_atomic(&path, |w| {
        writeln!(w, "{POINTS_HEADER}")?;
        for p in &merged.points {
            writeln!(w, "{}", point_line(p))?;
        }
        Ok(())
    })
    .map_err(io("write", &path))?;
    let path = dir.join("boundary.csv");
    write_atomic(&path, |w| {
        writeln!(w, "{BOUNDARY_HEADER}")?;
        for (side, b) in &merged.boundaries {
            writeln!(w, "{}", boundary_line(side, b))?;
        }
        Ok(())
    })
    .map_err(io("write", &path))?;
    let path = dir.join("duration-boundary.csv");
    write_atomic(&path, |w| {
        writeln!(w, "{DURATION_BOUNDARY_HEADER}")?;
        for b in &merged.durations {
            writeln!(w, "{}", duration_boundary_line(b))?;
        }
        Ok(())
    })
    .map_err(io("write", &path))
}
