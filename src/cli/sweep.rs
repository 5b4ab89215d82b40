//! `sagtrip sweep`: the trip map, its journal, resume and shards, and its report.

use super::*;

#[derive(Args)]
pub(crate) struct SweepArgs {
    #[command(flatten)]
    circuit: CircuitArgs,
    /// Dip residual levels in % of nominal, FROM:TO:STEP.
    #[arg(long, default_value = "0:90:10", allow_hyphen_values = true)]
    levels: String,
    /// Swell levels in % of nominal, FROM:TO:STEP (none unless given).
    #[arg(long, allow_hyphen_values = true)]
    swells: Option<String>,
    /// Shortest and longest duration, e.g. 0.5cyc:10s.
    #[arg(long, default_value = "0.5cyc:10s", allow_hyphen_values = true)]
    durations: String,
    /// Number of durations, spaced evenly on a log scale.
    #[arg(long, default_value_t = 12, allow_hyphen_values = true)]
    duration_count: usize,
    /// Start phase angles in degrees, comma-separated; each cell reports the worst case.
    #[arg(long, default_value = "0,90", allow_hyphen_values = true)]
    phases: String,
    /// Boundary resolution, % of nominal.
    #[arg(long, default_value_t = 0.5, allow_hyphen_values = true)]
    resolution: f64,
    /// Skip the boundary refinement.
    #[arg(long)]
    no_refine: bool,
    /// Journal the sweep into this folder as it runs (points.csv, boundary.csv) and write
    /// sweep.json at the end.
    #[arg(long)]
    out: Option<PathBuf>,
    /// Draw the trip map with the reference curves into FILE.svg or FILE.png.
    #[arg(long)]
    plot: Option<PathBuf>,
    /// No progress bar.
    #[arg(long)]
    quiet: bool,
    /// Print the results as JSON.
    #[arg(long)]
    json: bool,
    /// Nominal supply, e.g. 230V/50Hz (default: the mains source's own).
    #[arg(long, allow_hyphen_values = true)]
    nominal: Option<String>,
    /// Run only the K-th of N deterministic shares of the grid (for array jobs); join the
    /// shards' folders with `sagtrip merge`.
    #[arg(long, allow_hyphen_values = true)]
    shard: Option<String>,
    /// Continue the sweep journaled in --out, skipping the points it already holds.
    #[arg(long)]
    resume: bool,
    #[command(flatten)]
    limits: LimitArgs,
}

/// The progress bars of a sweep on the terminal: one for the points, one for the boundary
/// searches (hidden with `--quiet`).
struct Bars {
    quiet: bool,
    bar: std::sync::Mutex<indicatif::ProgressBar>,
}

impl Bars {
    fn new(quiet: bool) -> Self {
        Self {
            quiet,
            bar: std::sync::Mutex::new(indicatif::ProgressBar::hidden()),
        }
    }

    fn finish(&self) {
        if let Ok(bar) = self.bar.lock() {
            bar.finish_and_clear();
        }
    }
}

impl sagtrip::progress::Progress for Bars {
    fn stage(&self, what: &str, total: usize) {
        let Ok(mut bar) = self.bar.lock() else { return };
        bar.finish_and_clear();
        *bar = if self.quiet {
            indicatif::ProgressBar::hidden()
        } else {
            indicatif::ProgressBar::new(total as u64)
        };
        let template = if what == "points" {
            "{bar:40} {pos}/{len} points, {elapsed} elapsed, about {eta} left"
        } else {
            "{bar:40} {pos}/{len} boundary points ({msg}), {elapsed} elapsed, about {eta} left"
        };
        bar.set_style(
            indicatif::ProgressStyle::with_template(template)
                .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar()),
        );
    }

    fn item(&self, what: &str) {
        if let Ok(bar) = self.bar.lock() {
            bar.set_message(what.to_string());
        }
    }

    fn done(&self) {
        if let Ok(bar) = self.bar.lock() {
            bar.inc(1);
        }
    }
}

/// A journal error as the command line reports it: with the option that helps.
pub(crate) fn journal_failure(e: sagtrip::sweep::journal::JournalError) -> Failure {
    use sagtrip::sweep::journal::JournalError as E;
    match e {
        E::Occupied { .. } => Failure::Input(format!(
            "{e}: add --resume to continue it, or choose another folder"
        )),
        E::OtherSettings { .. } => Failure::Input(format!(
            "{e}; --resume needs the same circuit, grid and options"
        )),
        e => Failure::Input(e.to_string()),
    }
}

/// Reads `--shard K/N`.
pub(crate) fn shard_option(text: &str) -> Result<(usize, usize), String> {
    let parsed = text.split_once('/').and_then(|(k, n)| {
        Some((
            k.trim().parse::<usize>().ok()?,
            n.trim().parse::<usize>().ok()?,
        ))
    });
    match parsed {
        Some((k, n)) if n >= 1 && (1..=n).contains(&k) => Ok((k, n)),
        _ => Err(format!(
            "--shard {text}: expected K/N with 1 <= K <= N, e.g. 2/8"
        )),
    }
}

pub(crate) fn sweep(args: &SweepArgs) -> Outcome {
    use sagtrip::sweep::study::{run_study, StudySettings};
    use sagtrip::sweep::Grid;
    refuse_overwriting_inputs(
        &[
            ("--out", args.out.as_deref()),
            ("--plot", args.plot.as_deref()),
        ],
        &[args.circuit.path()],
    )?;
    let (circuit, name, text) = args.circuit.load_with_text()?;
    let options = args.limits.options(args.nominal.as_deref())?;
    let (levels, phases) = axes(args)?;
    let (k, n) = args
        .shard
        .as_deref()
        .map(shard_option)
        .transpose()?
        .unwrap_or((1, 1));
    if args.resume && args.out.is_none() {
        return Err("--resume needs --out DIR (the folder of the sweep to continue)".into());
    }
    let started = Instant::now();
    let settled =
        sagtrip::scenario::settle(&circuit, &options).map_err(|e| scenario_failure(&name, e))?;
    let settle_wall = started.elapsed().as_secs_f64();
    let frequency = settled.frequency_hz;
    let grid = Grid {
        levels_pct: levels,
        durations_s: durations(args, frequency)?,
        phases_deg: phases,
    };
    let study = StudySettings {
        grid,
        resolution_pct: args.resolution,
        refine: !args.no_refine,
        shard: sagtrip::sweep::Shard { index: k, count: n },
        edge_s: DEFAULT_EDGE_S,
        full_steps: args.limits.full_steps,
    };
    let settings = study.journal_settings(&name, &circuit.title, &text, settled.rms, frequency);
    let (journal, done) = match &args.out {
        Some(dir) => {
            let (j, c) = sagtrip::sweep::journal::Journal::open(dir, &settings, args.resume)
                .map_err(journal_failure)?;
            (Some(j), c)
        }
        None => (None, sagtrip::sweep::journal::Contents::default()),
    };
    let progress = Bars::new(args.quiet);
    let result = run_study(
        &settled,
        &circuit,
        &study,
        journal.as_ref(),
        done,
        &progress,
    )
    .map_err(|e| Failure::Run(format!("{name}: {e}")))?;
    progress.finish();
    let all = sagtrip::sweep::journal::Contents {
        points: result.points,
        boundaries: result.boundaries,
        durations: result.durations,
    };
    // The journal's files in their one order: a resumed or merged study gives the same.
    drop(journal);
    let (points, boundaries, durations_done) = match &args.out {
        Some(dir) => {
            let m = sagtrip::sweep::journal::finish(dir, settings, &study.grid, all)
                .map_err(journal_failure)?;
            (m.points, m.boundaries, m.durations)
        }
        None => sagtrip::sweep::journal::canonical(&study.grid, all),
    };
    let grid = study.grid;
    let wall = started.elapsed().as_secs_f64();
    report_sweep(
        &SweepReport {
            name: &name,
            title: &circuit.title,
            grid: &grid,
            points: &points,
            boundaries: &boundaries,
            duration_boundary: &durations_done,
            frequency_hz: frequency,
            resolution_pct: args.resolution,
            shard: sagtrip::sweep::Shard { index: k, count: n },
            wall_s: wall,
            settle_wall_s: Some(settle_wall),
        },
        args.out.as_deref(),
        args.plot.as_deref(),
        args.json,
    )
}

/// The grid's levels (dips, then swells) and start phases, and the checks of the counts
/// and the resolution: mistakes found before any simulation.
fn axes(args: &SweepArgs) -> Result<(Vec<f64>, Vec<f64>), Failure> {
    let mut levels = level_range(&args.levels, "levels")?;
    if levels.iter().any(|&l| l >= 100.0) {
        return Err("--levels: dip levels are below 100% (use --swells above it)".into());
    }
    let swells = args
        .swells
        .as_deref()
        .map(|s| level_range(s, "swells"))
        .transpose()?
        .unwrap_or_default();
    if swells.iter().any(|&l| l <= 100.0) {
        return Err("--swells: swell levels are above 100%".into());
    }
    levels.extend(&swells);
    let phases = phase_list(&args.phases, "phases")?;
    if args.duration_count > MAX_GRID_AXIS {
        return Err(format!(
            "--duration-count {}: at most {MAX_GRID_AXIS}",
            args.duration_count
        )
        .into());
    }
    if !(0.01..=50.0).contains(&args.resolution) {
        return Err(format!(
            "--resolution {}: allowed from 0.01 to 50 (% of nominal)",
            args.resolution
        )
        .into());
    }
    Ok((levels, phases))
}

/// The grid's durations, log-spaced; cycles count at the supply's `frequency`.
fn durations(args: &SweepArgs, frequency: f64) -> Result<Vec<f64>, Failure> {
    let (first, last) = args.durations.split_once(':').ok_or_else(|| {
        format!(
            "--durations {}: expected SHORTEST:LONGEST, e.g. 0.5cyc:10s",
            args.durations
        )
    })?;
    let first = duration_option(first, "durations", frequency)?;
    let last = duration_option(last, "durations", frequency)?;
    if first <= 0.0 || last < first || args.duration_count == 0 {
        return Err("--durations: need 0 < SHORTEST <= LONGEST and a positive count".into());
    }
    if first < DEFAULT_EDGE_S {
        return Err(format!(
            "--durations {}: the shortest event lasts at least the {DEFAULT_EDGE_S:e} s edge the \
             supply takes to reach its level",
            args.durations
        )
        .into());
    }
    Ok(sagtrip::sweep::log_durations(
        first,
        last,
        args.duration_count,
    ))
}

pub(crate) use sagtrip::sweep::report::Report as SweepReport;

/// Writes sweep.json (and the plot), and renders the text or JSON report.
pub(crate) fn report_sweep(
    r: &SweepReport<'_>,
    out_dir: Option<&Path>,
    plot: Option<&Path>,
    json: bool,
) -> Result<String, Failure> {
    let value = r.json();
    if let Some(dir) = out_dir {
        write_atomic(&dir.join("sweep.json"), |w| {
            w.write_all(
                serde_json::to_string_pretty(&value)
                    .unwrap_or_default()
                    .as_bytes(),
            )
        })
        .map_err(|e| format!("cannot write sweep.json: {e}"))?;
    }
    if let Some(path) = plot {
        let sorted = r.sorted();
        let mut levels = r.grid.levels_pct.clone();
        levels.sort_by(f64::total_cmp);
        let map_data = r.map_data(&sorted, &levels);
        write_plot(
            path,
            |p| sagtrip::plot::map_png(&map_data, p),
            || sagtrip::plot::map_svg(&map_data),
        )?;
    }
    if json {
        return Ok(pretty_json(&value) + "\n");
    }
    Ok(r.text(out_dir, plot))
}
