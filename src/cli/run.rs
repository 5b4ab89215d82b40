//! `sagtrip run`: a power-up, or one supply event and the measured response.

use super::*;

#[derive(Args)]
pub(crate) struct RunArgs {
    #[command(flatten)]
    pub(crate) circuit: CircuitArgs,
    /// Simulated time, e.g. 200ms, 1s (default: 2 s for a circuit with a relay, else 10
    /// mains cycles, or 100 ms without a sine source).
    #[arg(long, allow_hyphen_values = true)]
    pub(crate) duration: Option<String>,
    /// Largest time step, e.g. 50us (default 500us; the truncation-error control takes
    /// shorter steps wherever the waveforms need them).
    #[arg(long, allow_hyphen_values = true)]
    pub(crate) max_step: Option<String>,
    /// How the run begins (default: from rest, as when the unit is plugged in).
    #[arg(long, value_enum, default_value_t = StartArg::Rest)]
    pub(crate) start: StartArg,
    /// Quantity to record: a node name, or current:PART (repeatable; default: every node
    /// and the currents of sources, inductors, transformers and switches).
    #[arg(long = "probe")]
    pub(crate) probes: Vec<String>,
    /// Write the probed waveforms to this CSV file.
    #[arg(long)]
    pub(crate) trace: Option<PathBuf>,
    /// Print the summary as JSON.
    #[arg(long)]
    pub(crate) json: bool,
    /// Print solver counters (steps, Newton iterations, factorisations).
    #[arg(long)]
    pub(crate) stats: bool,
    /// List every discrete event (relay armature and contacts, switches, timers).
    #[arg(long)]
    pub(crate) events: bool,
    /// Supply disturbance to apply after power-up: a compact spec such as
    /// dip:40%:10cyc@90, interrupt:250cyc, swell:120%:25cyc, vary:70%:0cyc/1cyc/25cyc,
    /// ramp:100%-65%:20s (items joined by `;`, with gap:DURATION between), or a preset name
    /// from `sagtrip presets` such as class3-dip-40 (optionally @DEGREES).
    #[arg(long, conflicts_with = "event_file", allow_hyphen_values = true)]
    pub(crate) event: Option<String>,
    /// Supply event from a TOML event file (a sequence; see docs/events.md).
    #[arg(long)]
    pub(crate) event_file: Option<PathBuf>,
    /// Nominal supply, e.g. 230V/50Hz (default: the mains source's own).
    #[arg(long, allow_hyphen_values = true)]
    pub(crate) nominal: Option<String>,
    /// The source part driven as the mains (default: the only sine voltage source).
    #[arg(long, allow_hyphen_values = true)]
    pub(crate) mains: Option<String>,
    /// The relay switching the load (default: the only relay).
    #[arg(long, allow_hyphen_values = true)]
    pub(crate) relay: Option<String>,
    /// The logic supply-rail node watched for brown-out (default: vcc, or the regulator
    /// output).
    #[arg(long, allow_hyphen_values = true)]
    pub(crate) rail: Option<String>,
    /// Rise and fall time of abrupt changes (default 5us).
    #[arg(long, allow_hyphen_values = true)]
    pub(crate) edge: Option<String>,
    /// With --event: draw the run as stacked panels into FILE.svg or FILE.png.
    #[arg(long)]
    pub(crate) plot: Option<PathBuf>,
    #[command(flatten)]
    pub(crate) limits: LimitArgs,
}

#[derive(Clone, Copy, PartialEq, Eq, ValueEnum)]
pub(crate) enum StartArg {
    /// Start at the DC operating point with the sources at their t = 0 values.
    OperatingPoint,
    /// Start from rest: capacitors discharged (or at their `initial_voltage`).
    Rest,
}

pub(crate) fn run(args: &RunArgs) -> Outcome {
    refuse_overwriting_inputs(
        &[("--trace", args.trace.as_deref())],
        &[args.circuit.path()],
    )?;
    for (given, option) in [
        (args.plot.is_some(), "--plot"),
        (args.nominal.is_some(), "--nominal"),
        (args.mains.is_some(), "--mains"),
        (args.relay.is_some(), "--relay"),
        (args.rail.is_some(), "--rail"),
        (args.edge.is_some(), "--edge"),
        (args.limits.power_up_limit.is_some(), "--power-up-limit"),
        (args.limits.restore_limit.is_some(), "--restore-limit"),
    ] {
        if given {
            return Err(format!("{option} goes with --event or --event-file").into());
        }
    }
    let (circuit, name) = args.circuit.load()?;
    let mut settings = Settings::default();
    if let Some(step) = time_option(args.max_step.as_deref(), "max-step")? {
        settings.max_step_s = step;
    }
    let has_relay = circuit
        .parts
        .iter()
        .any(|p| matches!(p.spec, PartSpec::Relay(_)));
    let mains_hz = circuit.mains_frequency_hz();
    let duration = time_option(args.duration.as_deref(), "duration")?.unwrap_or(if has_relay {
        2.0
    } else {
        mains_hz.map_or(0.1, |f| 10.0 / f)
    });
    let probes = if args.probes.is_empty() {
        Probe::defaults(&circuit)
    } else {
        args.probes
            .iter()
            .map(|p| Probe::parse(p, &circuit).map_err(|e| format!("--probe {p}: {e}")))
            .collect::<Result<Vec<_>, _>>()?
    };

    let started = Instant::now();
    let mut sim = Simulator::new(&circuit, settings);
    let start = match args.start {
        StartArg::OperatingPoint => Start::OperatingPoint,
        StartArg::Rest => Start::Rest,
    };
    let mut state = sim
        .start(start)
        .map_err(|e| Failure::Run(format!("{name}: {e}")))?;
    // Settled values: over the last mains cycle, or the last tenth of the run. Without a
    // trace file only that window is kept (memory stays bounded on long runs).
    let window_s = mains_hz.map_or(0.1 * duration, |f| (1.0 / f).min(duration));
    let mut trace = Trace::new(probes);
    if args.trace.is_none() {
        trace.keep_last_s = Some(2.0 * window_s);
    }
    trace.record(sim.network(), &state);
    sim.advance(&mut state, duration, &mut trace)
        .map_err(|e| Failure::Run(format!("{name}: {e}")))?;
    let wall = started.elapsed().as_secs_f64();

    if let Some(path) = &args.trace {
        write_atomic(path, |w| trace.write_csv(&circuit, w))
            .map_err(|e| format!("cannot write trace {}: {e}", path.display()))?;
    }
    let trace_file = args.trace.as_ref().map(|p| p.display().to_string());
    let report = RunReport {
        name: &name,
        circuit: &circuit,
        start,
        duration_s: duration,
        window_s,
        trace: &trace,
        stats: &state.stats,
        wall_s: wall,
        trace_file: trace_file.as_deref(),
    };
    Ok(if args.json {
        format!("{}\n", pretty_json(&report.json()))
    } else {
        report.text(args.events, args.stats)
    })
}

pub(crate) fn run_event_command(args: &RunArgs) -> Outcome {
    refuse_overwriting_inputs(
        &[
            ("--trace", args.trace.as_deref()),
            ("--plot", args.plot.as_deref()),
        ],
        &[args.circuit.path(), args.event_file.as_deref()],
    )?;
    for (given, option) in [
        (args.duration.is_some(), "--duration"),
        (args.events, "--events"),
        (args.stats, "--stats"),
        (args.start != StartArg::Rest, "--start"),
    ] {
        if given {
            return Err(format!(
                "{option} does not go with --event (the event run powers up from rest and runs until the protector has restored)"
            )
            .into());
        }
    }
    let (circuit, name) = args.circuit.load()?;
    let mut options = EventOptions {
        mains: args.mains.clone(),
        relay: args.relay.clone(),
        rail: args.rail.clone(),
        ..args.limits.options(args.nominal.as_deref())?
    };
    if let Some(step) = time_option(args.max_step.as_deref(), "max-step")? {
        options.settings.max_step_s = step;
    }
    let edge = time_option(args.edge.as_deref(), "edge")?.unwrap_or(DEFAULT_EDGE_S);
    options.probes = args
        .probes
        .iter()
        .map(|p| Probe::parse(p, &circuit).map_err(|e| format!("--probe {p}: {e}")))
        .collect::<Result<Vec<_>, _>>()?;
    if args.plot.is_some() {
        for p in sagtrip::plot::plot_probes(&circuit) {
            if !options.probes.contains(&p) {
                options.probes.push(p);
            }
        }
    }
    if let Some(path) = &args.plot {
        check_plot_name(path)?;
    }
    let mains =
        find_mains(&circuit, options.mains.as_deref()).map_err(|e| format!("{name}: {e}"))?;
    let frequency = options
        .nominal
        .map_or(mains.frequency_hz, |n| n.frequency_hz);
    let profile = match &args.event_file {
        Some(path) => {
            let text = read_text(path, "event file")?;
            let mut profile =
                sagtrip::profile::parse_event_file(&text, &path.display().to_string())
                    .map_err(|e| e.to_string())?;
            if args.edge.is_some() {
                profile.edge_s = edge;
            }
            profile
        }
        None => {
            let spec = args.event.as_deref().unwrap_or_default();
            resolve(spec, frequency, edge).map_err(|e| format!("--event: {e}"))?
        }
    };

    profile
        .check(frequency)
        .map_err(|e| match &args.event_file {
            Some(path) => format!("{}: event.{}: {e}", path.display(), e.step()),
            None => format!("--event: {e}"),
        })?;
    let started = Instant::now();
    let result = run_event(&circuit, &profile, &options).map_err(|e| scenario_failure(&name, e))?;
    let wall = started.elapsed().as_secs_f64();
    if let Some(path) = &args.trace {
        write_atomic(path, |w| result.trace.write_csv(&circuit, w))
            .map_err(|e| format!("cannot write trace {}: {e}", path.display()))?;
    }
    if let Some(path) = &args.plot {
        write_plot(
            path,
            |p| sagtrip::plot::event_png(&result, &circuit, &name, p),
            || sagtrip::plot::event_svg(&result, &circuit, &name),
        )?;
    }
    let trace_file = args.trace.as_ref().map(|p| p.display().to_string());
    let plot_file = args.plot.as_ref().map(|p| p.display().to_string());
    let report = EventReport {
        name: &name,
        title: &circuit.title,
        run: &result,
        phase_deg: profile.phase_deg,
        wall_s: wall,
        trace_file: trace_file.as_deref(),
        plot_file: plot_file.as_deref(),
    };
    Ok(if args.json {
        format!("{}\n", pretty_json(&report.json()))
    } else {
        report.text()
    })
}
