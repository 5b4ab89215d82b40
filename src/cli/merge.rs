//! `sagtrip merge`: join the folders of a sharded sweep.

use super::sweep::{read_journal, report_sweep, SweepReport};
use super::*;

#[derive(Args)]
pub(crate) struct MergeArgs {
    /// The folders of the shards (each written by `sweep --shard K/N --out FOLDER`).
    #[arg(required = true)]
    folders: Vec<PathBuf>,
    /// Folder for the merged points.csv, boundary.csv and sweep.json.
    #[arg(long)]
    out: PathBuf,
    /// Draw the merged trip map into FILE.svg or FILE.png.
    #[arg(long)]
    plot: Option<PathBuf>,
}

/// Joins the folders of a sharded sweep into one result.
pub(crate) fn merge(args: &MergeArgs) -> Outcome {
    use sagtrip::sweep::{parse_boundary_line, parse_point_line, Grid};
    let mut settings: Option<serde_json::Value> = None;
    let mut points = Vec::new();
    let mut boundaries = Vec::new();
    let mut durations: Vec<sagtrip::sweep::DurationBoundaryPoint> = Vec::new();
    for dir in &args.folders {
        let path = dir.join("sweep-settings.json");
        let text = std::fs::read_to_string(&path)
            .map_err(|e| format!("cannot read {}: {e}", path.display()))?;
        let mut s: serde_json::Value =
            serde_json::from_str(&text).map_err(|e| format!("{}: {e}", path.display()))?;
        if let serde_json::Value::Object(m) = &mut s {
            m.remove("shard");
        }
        match &settings {
            None => settings = Some(s),
            Some(first) if *first != s => {
                return Err(format!(
                    "{} holds a sweep with other settings than {}: only shards of one sweep merge",
                    dir.display(),
                    args.folders[0].display()
                )
                .into())
            }
            Some(_) => {}
        }
        points.extend(
            read_journal(&dir.join("points.csv"))
                .iter()
                .filter_map(|l| parse_point_line(l)),
        );
        boundaries.extend(
            read_journal(&dir.join("boundary.csv"))
                .iter()
                .filter_map(|l| parse_boundary_line(l)),
        );
        durations.extend(
            read_journal(&dir.join("duration-boundary.csv"))
                .iter()
                .filter_map(|l| sagtrip::sweep::parse_duration_boundary_line(l)),
        );
    }
    durations.sort_by(|a, b| a.level_pct.total_cmp(&b.level_pct));
    let settings = settings.ok_or("merge needs at least one folder")?;
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
    std::fs::create_dir_all(&args.out)
        .map_err(|e| format!("cannot create {}: {e}", args.out.display()))?;
    let ordered = sagtrip::sweep::in_grid_order(&grid, &points);
    write_atomic(&args.out.join("points.csv"), |w| {
        writeln!(w, "{}", sagtrip::sweep::POINTS_HEADER)?;
        for p in &ordered {
            writeln!(w, "{}", sagtrip::sweep::point_line(p))?;
        }
        Ok(())
    })
    .map_err(|e| format!("cannot write points.csv: {e}"))?;
    write_atomic(&args.out.join("boundary.csv"), |w| {
        writeln!(w, "{}", sagtrip::sweep::BOUNDARY_HEADER)?;
        for (side, b) in &boundaries {
            writeln!(w, "{}", sagtrip::sweep::boundary_line(side, b))?;
        }
        Ok(())
    })
    .map_err(|e| format!("cannot write boundary.csv: {e}"))?;
    write_atomic(&args.out.join("duration-boundary.csv"), |w| {
        writeln!(w, "{}", sagtrip::sweep::DURATION_BOUNDARY_HEADER)?;
        for b in &durations {
            writeln!(w, "{}", sagtrip::sweep::duration_boundary_line(b))?;
        }
        Ok(())
    })
    .map_err(|e| format!("cannot write duration-boundary.csv: {e}"))?;
    let missing = grid.points().len().saturating_sub(ordered.len());
    let name = settings["circuit"].as_str().unwrap_or("").to_string();
    let title = settings["title"].as_str().unwrap_or("").to_string();
    let mut text = report_sweep(
        &SweepReport {
            name: &name,
            title: &title,
            grid: &grid,
            points: &ordered,
            boundaries: &boundaries,
            duration_boundary: &durations,
            frequency_hz: settings["frequency_hz"].as_f64().unwrap_or(50.0),
            resolution_pct: settings["resolution_pct"].as_f64().unwrap_or(0.5),
            shard: (1, 1),
            wall_s: 0.0,
            settle_wall_s: None,
        },
        Some(&args.out),
        args.plot.as_deref(),
        false,
    )?;
    if missing > 0 {
        text += &format!("WARNING: {missing} grid points are in none of the folders (a shard not run or not finished)\n");
    }
    Ok(text)
}
