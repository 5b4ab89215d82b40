//! `sagtrip merge`: join the folders of a sharded sweep.

use super::sweep::{journal_failure, report_sweep, SweepReport};
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
    use sagtrip::sweep::journal;
    let inputs: Vec<Option<&Path>> = args.folders.iter().map(|f| Some(f.as_path())).collect();
    refuse_overwriting_inputs(
        &[
            ("--out", Some(args.out.as_path())),
            ("--plot", args.plot.as_deref()),
        ],
        &inputs,
    )?;
    let merged = journal::merge(&args.folders).map_err(journal_failure)?;
    journal::write_merged(&args.out, &merged).map_err(journal_failure)?;
    let journal::Merged {
        settings,
        grid,
        points: ordered,
        boundaries,
        durations,
        missing,
    } = merged;
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
            shard: sagtrip::sweep::Shard::WHOLE,
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
