//! `sagtrip sweep`: the trip map, its journal, resume and shards, and its report.

use super::*;

#[derive(Args)]
pub(crate) struct SweepArgs {
    /// Circuit file (TOML); the built-in reference guard when omitted.
    #[arg(long)]
    circuit: Option<PathBuf>,
    /// Dip residual levels in % of nominal, FROM:TO:STEP.
    #[arg(long, default_value = "0:90:10")]
    levels: String,
    /// Swell levels in % of nominal, FROM:TO:STEP (none unless given).
    #[arg(long)]
    swells: Option<String>,
    /// Shortest and longest duration, e.g. 0.5cyc:10s.
    #[arg(long, default_value = "0.5cyc:10s")]
    durations: String,
    /// Number of durations, spaced evenly on a log scale.
    #[arg(long, default_value_t = 12)]
    duration_count: usize,
    /// Start phase angles in degrees, comma-separated; each cell reports the worst case.
    #[arg(long, default_value = "0,90")]
    phases: String,
    /// Boundary resolution, % of nominal.
    #[arg(long, default_value_t = 0.5)]
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
    #[arg(long)]
    nominal: Option<String>,
    /// Run only the K-th of N deterministic shares of the grid (for array jobs); join the
    /// shards' folders with `sagtrip merge`.
    #[arg(long)]
    shard: Option<String>,
    /// Continue the sweep journaled in --out, skipping the points it already holds.
    #[arg(long)]
    resume: bool,
    #[command(flatten)]
    limits: LimitArgs,
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
    use sagtrip::sweep::{log_durations, refine_boundary, run_points, shard, Grid};
    refuse_overwriting_inputs(
        &[
            ("--out", args.out.as_deref()),
            ("--plot", args.plot.as_deref()),
        ],
        &[args.circuit.as_deref()],
    )?;
    let (circuit, name) = load_circuit(args.circuit.as_deref())?;
    let options = args.limits.options(args.nominal.as_deref())?;
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
    let phases: Vec<f64> = args
        .phases
        .split(',')
        .map(|p| p.trim().parse::<f64>())
        .collect::<Result<_, _>>()
        .map_err(|_| format!("--phases {}: expected degrees, e.g. 0,90", args.phases))?;
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
    let grid = Grid {
        levels_pct: levels,
        durations_s: log_durations(first, last, args.duration_count),
        phases_deg: phases,
    };
    let settings = serde_json::json!({
        "circuit": name,
        "title": circuit.title,
        "nominal_rms_v": settled.rms,
        "frequency_hz": frequency,
        "levels_pct": grid.levels_pct,
        "swells": !swells.is_empty(),
        "durations_s": grid.durations_s,
        "phases_deg": grid.phases_deg,
        "resolution_pct": args.resolution,
        "refine": !args.no_refine,
        "shard": format!("{k}/{n}"),
    });
    let (journal, done) = match &args.out {
        Some(dir) => {
            let (j, c) = sagtrip::sweep::journal::Journal::open(dir, &settings, args.resume)
                .map_err(journal_failure)?;
            (Some(j), c)
        }
        None => (None, sagtrip::sweep::journal::Contents::default()),
    };
    let (done_points, done_boundary, done_durations) =
        (done.points, done.boundaries, done.durations);

    // This shard's points not yet in the journal.
    let mine = shard(&grid.points(), k, n);
    let todo: Vec<(f64, f64, f64)> = mine
        .iter()
        .copied()
        .filter(|&(l, d, p)| {
            !done_points
                .iter()
                .any(|x| x.level_pct == l && x.duration_s == d && x.phase_deg == p)
        })
        .collect();
    let bar = if args.quiet {
        indicatif::ProgressBar::hidden()
    } else {
        indicatif::ProgressBar::new(todo.len() as u64)
    };
    bar.set_style(
        indicatif::ProgressStyle::with_template(
            "{bar:40} {pos}/{len} points, {elapsed} elapsed, about {eta} left",
        )
        .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar()),
    );
    let fresh = run_points(&settled, &circuit, &todo, DEFAULT_EDGE_S, &|p| {
        if let Some(j) = &journal {
            j.point(p);
        }
        bar.inc(1);
    });
    bar.finish_and_clear();
    let mut points = done_points;
    points.extend(fresh);

    // Boundaries for this shard's durations not yet in the journal.
    let mut boundaries = done_boundary;
    let my_durations = shard(&grid.durations_s, k, n);
    let mut sides: Vec<(&str, (f64, f64))> = Vec::new();
    if !args.no_refine {
        sides.push(("dip", (0.0, 100.0)));
        if !swells.is_empty() {
            sides.push((
                "swell",
                (100.0, swells.iter().copied().fold(100.0, f64::max)),
            ));
        }
    }
    // The durations of the level boundaries, and the levels of the duration boundary,
    // still to refine.
    let level_todo: Vec<(&str, (f64, f64), f64)> = sides
        .iter()
        .flat_map(|&(side, range)| my_durations.iter().map(move |&d| (side, range, d)))
        .filter(|(side, _, d)| {
            !boundaries
                .iter()
                .any(|(s, b)| s == side && b.duration_s == *d)
        })
        .collect();
    let mut durations_done = done_durations;
    let duration_todo: Vec<f64> = if args.no_refine {
        Vec::new()
    } else {
        shard(&grid.levels_pct, k, n)
            .into_iter()
            .filter(|l| !durations_done.iter().any(|b| b.level_pct == *l))
            .collect()
    };
    let bar = if args.quiet {
        indicatif::ProgressBar::hidden()
    } else {
        indicatif::ProgressBar::new((level_todo.len() + duration_todo.len()) as u64)
    };
    bar.set_style(
        indicatif::ProgressStyle::with_template(
            "{bar:40} {pos}/{len} boundary points ({msg}), {elapsed} elapsed, about {eta} left",
        )
        .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar()),
    );
    for (side, range, d) in level_todo {
        bar.set_message(format!("{side} level at {}", short_duration(d)));
        {
            let b = refine_boundary(
                &settled,
                &circuit,
                d,
                &grid.phases_deg,
                range,
                args.resolution,
                DEFAULT_EDGE_S,
            )
            .map_err(|e| {
                Failure::Run(format!(
                    "{name}: {side} boundary at {}: {e}",
                    short_duration(d)
                ))
            })?;
            if let Some(j) = &journal {
                j.boundary(side, &b);
            }
            boundaries.push((side.to_string(), b));
            bar.inc(1);
        }
    }
    let known = sagtrip::sweep::cells(&points);
    let range = (
        grid.durations_s
            .iter()
            .copied()
            .fold(f64::INFINITY, f64::min),
        grid.durations_s.iter().copied().fold(0.0, f64::max),
    );
    for level in duration_todo {
        bar.set_message(format!("longest ride-through at {level}%"));
        let b = sagtrip::sweep::refine_duration_boundary(
            &settled,
            &circuit,
            level,
            &grid.phases_deg,
            range,
            &known,
            DEFAULT_EDGE_S,
        )
        .map_err(|e| Failure::Run(format!("{name}: longest ride-through: {e}")))?;
        if let Some(j) = &journal {
            j.duration(&b);
        }
        durations_done.push(b);
        bar.inc(1);
    }
    bar.finish_and_clear();
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
            shard: (k, n),
            wall_s: wall,
            settle_wall_s: Some(settle_wall),
        },
        args.out.as_deref(),
        args.plot.as_deref(),
        args.json,
    )
}

/// Everything a sweep report shows.
pub(crate) struct SweepReport<'a> {
    pub(crate) name: &'a str,
    pub(crate) title: &'a str,
    pub(crate) grid: &'a sagtrip::sweep::Grid,
    pub(crate) points: &'a [sagtrip::sweep::Point],
    pub(crate) boundaries: &'a [(String, sagtrip::sweep::BoundaryPoint)],
    pub(crate) duration_boundary: &'a [sagtrip::sweep::DurationBoundaryPoint],
    pub(crate) frequency_hz: f64,
    pub(crate) resolution_pct: f64,
    pub(crate) shard: (usize, usize),
    pub(crate) wall_s: f64,
    /// Wall time of the one power-up all points share.
    pub(crate) settle_wall_s: Option<f64>,
}

/// Writes sweep.json (and the plot), and renders the text or JSON report.
pub(crate) fn report_sweep(
    r: &SweepReport<'_>,
    out_dir: Option<&Path>,
    plot: Option<&Path>,
    json: bool,
) -> Result<String, Failure> {
    use sagtrip::sweep::{cells, in_grid_order, Outcome};
    let mut out = String::new();
    let points = in_grid_order(r.grid, r.points);
    let map = cells(&points);
    let side = |s: &str| -> Vec<sagtrip::sweep::BoundaryPoint> {
        let mut list: Vec<_> = r
            .boundaries
            .iter()
            .filter(|(x, _)| x == s)
            .map(|(_, b)| b.clone())
            .collect();
        list.sort_by(|a, b| a.duration_s.total_cmp(&b.duration_s));
        list
    };
    let (dips, swells) = (side("dip"), side("swell"));
    let mut longest = r.duration_boundary.to_vec();
    longest.sort_by(|a, b| a.level_pct.total_cmp(&b.level_pct));
    let failed = points
        .iter()
        .filter(|p| p.outcome == Outcome::Failed)
        .count();
    let value = serde_json::json!({
        "circuit": r.name,
        "title": r.title,
        "frequency_hz": r.frequency_hz,
        "shard": format!("{}/{}", r.shard.0, r.shard.1),
        "points": points,
        "cells": map,
        "dip_boundary": dips,
        "swell_boundary": swells,
        "duration_boundary": longest,
        "wall_time_s": r.wall_s,
        "power_up_wall_time_s": r.settle_wall_s,
    });
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
        let mut sorted_levels = r.grid.levels_pct.clone();
        sorted_levels.sort_by(f64::total_cmp);
        let map_data = sagtrip::plot::MapData {
            title: format!("Trip map: {} ({})", r.title, r.name),
            cells: &map,
            durations_s: &r.grid.durations_s,
            levels_pct: &sorted_levels,
            boundaries: vec![&dips, &swells],
            duration_boundary: &longest,
            frequency_hz: r.frequency_hz,
        };
        write_plot(
            path,
            |p| sagtrip::plot::map_png(&map_data, p),
            || sagtrip::plot::map_svg(&map_data),
        )?;
    }
    if json {
        say!(out, "{}", pretty_json(&value));
        return Ok(out);
    }
    say!(out, "{}: {}", r.name, r.title);
    say!(
        out,
        "{} points ({} levels x {} durations x {} phases{}) in {:.1} s{}",
        points.len(),
        r.grid.levels_pct.len(),
        r.grid.durations_s.len(),
        r.grid.phases_deg.len(),
        if r.shard.1 > 1 {
            format!(", shard {} of {}", r.shard.0, r.shard.1)
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
    let mut header = format!("{:>8} ", "level");
    for d in &r.grid.durations_s {
        header += &format!("{:>8}", short_duration(*d));
    }
    say!(out, "{header}");
    let mut levels = r.grid.levels_pct.clone();
    levels.sort_by(|a, b| b.total_cmp(a));
    for l in levels {
        let mut row = format!("{:>7}% ", l);
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
    for (side, list) in [("dip", &dips), ("swell", &swells)] {
        if list.is_empty() {
            continue;
        }
        say!(
            out,
            "\n{side} boundary (refined to +/- {} % of nominal):",
            r.resolution_pct
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
    if !longest.is_empty() {
        use sagtrip::sweep::DurationSearch;
        say!(
            out,
            "\nlongest event ridden through at every phase (refined to 1% of the duration or 0.5 ms):"
        );
        for b in &longest {
            let text = match (b.status, b.longest_ride_through_s, b.shortest_trip_s) {
                (DurationSearch::Found, Some(ride), Some(trip)) => format!(
                    "{} (trips at {})",
                    sagtrip::units::format_duration(ride),
                    sagtrip::units::format_duration(trip)
                ),
                (DurationSearch::RidesThroughAll, Some(ride), _) => {
                    format!(
                        "at least {} (the longest searched)",
                        sagtrip::units::format_duration(ride)
                    )
                }
                (_, _, Some(trip)) => {
                    format!(
                        "none: trips at {} (the shortest searched)",
                        sagtrip::units::format_duration(trip)
                    )
                }
                _ => "-".into(),
            };
            say!(out, "  {:>7}%  {text}", b.level_pct);
        }
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
    Ok(out)
}
