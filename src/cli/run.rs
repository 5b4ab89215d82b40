//! `sagtrip run`: a power-up, or one supply event and the measured response.

use super::*;

#[derive(Args)]
pub(crate) struct RunArgs {
    /// Circuit file (TOML); the built-in reference guard when omitted.
    #[arg(long)]
    pub(crate) circuit: Option<PathBuf>,
    /// Simulated time, e.g. 200ms, 1s (default: 2 s for a circuit with a relay, else 10
    /// mains cycles, or 100 ms without a sine source).
    #[arg(long)]
    pub(crate) duration: Option<String>,
    /// Largest time step, e.g. 50us (default 500us; the truncation-error control takes
    /// shorter steps wherever the waveforms need them).
    #[arg(long)]
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
    /// from `sagtrip profiles` such as class3-dip-40 (optionally @DEGREES).
    #[arg(long, conflicts_with = "event_file")]
    pub(crate) event: Option<String>,
    /// Supply event from a TOML event file (a sequence; see docs/events.md).
    #[arg(long)]
    pub(crate) event_file: Option<PathBuf>,
    /// Nominal supply, e.g. 230V/50Hz (default: the mains source's own).
    #[arg(long)]
    pub(crate) nominal: Option<String>,
    /// The source part driven as the mains (default: the only sine voltage source).
    #[arg(long)]
    pub(crate) mains: Option<String>,
    /// The relay switching the load (default: the only relay).
    #[arg(long)]
    pub(crate) relay: Option<String>,
    /// The logic supply-rail node watched for brown-out (default: vcc, or the regulator
    /// output).
    #[arg(long)]
    pub(crate) rail: Option<String>,
    /// Rise and fall time of abrupt changes (default 5us).
    #[arg(long)]
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
    /// Start from rest: capacitors discharged (or at their initial_voltage).
    Rest,
}

pub(crate) fn run(args: &RunArgs) -> Outcome {
    let mut out = String::new();
    refuse_overwriting_inputs(
        &[("--trace", args.trace.as_deref())],
        &[args.circuit.as_deref()],
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
    let (circuit, name) = load_circuit(args.circuit.as_deref())?;
    let mut settings = Settings::default();
    if let Some(step) = time_option(&args.max_step, "max-step")? {
        settings.max_step_s = step;
    }
    let has_relay = circuit
        .parts
        .iter()
        .any(|p| matches!(p.spec, PartSpec::Relay(_)));
    let mains_hz = circuit.mains_frequency_hz();
    let duration = time_option(&args.duration, "duration")?.unwrap_or(if has_relay {
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
    let mut trace = Trace::new(probes);
    trace.record(sim.network(), &state);
    sim.advance(&mut state, duration, &mut trace)
        .map_err(|e| Failure::Run(format!("{name}: {e}")))?;
    let wall = started.elapsed().as_secs_f64();

    if let Some(path) = &args.trace {
        write_atomic(path, |w| trace.write_csv(&circuit, w))
            .map_err(|e| format!("cannot write trace {}: {e}", path.display()))?;
    }

    // Settled values: over the last mains cycle, or the last tenth of the run.
    let window = mains_hz.map_or(0.1 * duration, |f| (1.0 / f).min(duration));
    let settled = settled_values(&circuit, &trace, window);
    let relays = relay_timelines(&circuit, &trace);

    if args.json {
        let value = serde_json::json!({
            "circuit": name,
            "title": circuit.title,
            "duration_s": duration,
            "settled_window_s": window,
            "probes": settled,
            "relays": relays,
            "events": trace.events.iter().map(|e| serde_json::json!({
                "time_s": e.time,
                "part": circuit.parts[e.part].name,
                "kind": e.kind,
            })).collect::<Vec<_>>(),
            "stats": state.stats,
            "wall_time_s": wall,
            "trace": args.trace.as_ref().map(|p| p.display().to_string()),
        });
        say!(out, "{}", pretty_json(&value));
        return Ok(out);
    }

    say!(
        out,
        "{name}{}",
        if circuit.title.is_empty() {
            String::new()
        } else {
            format!(": {}", circuit.title)
        }
    );
    say!(
        out,
        "simulated {} from {} in {} steps ({:.3} s wall, {:.0}x real time)",
        Engineering(duration, Quantity::Time),
        match start {
            Start::Rest => "rest",
            Start::OperatingPoint => "the operating point",
        },
        state.stats.accepted_steps,
        wall,
        duration / wall.max(1e-9)
    );
    for r in &relays {
        say!(out);
        match (
            r.first_pickup_s,
            r.first_contact_made_s,
            r.contact_settled_s,
        ) {
            (Some(pickup), made, settled) => {
                say!(
                    out,
                    "relay `{}` first picked up at {:.3} ms",
                    r.relay,
                    pickup * 1e3
                );
                if let Some(made) = made {
                    say!(
                        out,
                        "  normally-open contact first made at {:.3} ms",
                        made * 1e3
                    );
                }
                if let Some(settled) = settled {
                    say!(
                        out,
                        "  contact closed for good (after bounce) at {:.3} ms",
                        settled * 1e3
                    );
                }
                say!(
                    out,
                    "  {} armature transition{}; {} at the end",
                    r.armature_transitions,
                    if r.armature_transitions == 1 { "" } else { "s" },
                    if r.operated_at_end {
                        "picked up"
                    } else {
                        "released"
                    }
                );
            }
            (None, ..) => {
                say!(out, "relay `{}` never picked up", r.relay);
            }
        }
    }
    say!(
        out,
        "\nsettled values over the last {}:",
        Engineering(window, Quantity::Time)
    );
    say!(
        out,
        "{:<22} {:>14} {:>14} {:>14} {:>14}",
        "probe",
        "mean",
        "min",
        "max",
        "final"
    );
    for s in &settled {
        say!(
            out,
            "{:<22} {:>14.6} {:>14.6} {:>14.6} {:>14.6}",
            s.probe,
            s.mean,
            s.min,
            s.max,
            s.last
        );
    }
    if !trace.events.is_empty() && args.events {
        say!(out, "\ndiscrete events:");
        for e in &trace.events {
            say!(
                out,
                "  {:>12.6} ms  {:<14} {:?}",
                e.time * 1e3,
                circuit.parts[e.part].name,
                e.kind
            );
        }
    }
    if args.stats {
        let s = &state.stats;
        say!(
            out,
            "\nsolver: {} accepted steps, {} rejected, {} Newton failures, {} Newton iterations, {} factorisations ({} with a new pivot order), {} restarts, {} located events",
            s.accepted_steps,
            s.rejected_steps,
            s.newton_failures,
            s.newton_iterations,
            s.factorizations,
            s.reorders,
            s.restarts,
            s.located_events
        );
    }
    if let Some(path) = &args.trace {
        say!(
            out,
            "\ntrace: {} rows x {} probes written to {}",
            trace.time.len(),
            trace.probes.len(),
            path.display()
        );
    }
    Ok(out)
}

pub(crate) fn run_event_command(args: &RunArgs) -> Outcome {
    let mut out = String::new();
    refuse_overwriting_inputs(
        &[
            ("--trace", args.trace.as_deref()),
            ("--plot", args.plot.as_deref()),
        ],
        &[args.circuit.as_deref(), args.event_file.as_deref()],
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
    let (circuit, name) = load_circuit(args.circuit.as_deref())?;
    let mut options = EventOptions {
        mains: args.mains.clone(),
        relay: args.relay.clone(),
        rail: args.rail.clone(),
        ..args.limits.options(args.nominal.as_deref())?
    };
    if let Some(step) = time_option(&args.max_step, "max-step")? {
        options.settings.max_step_s = step;
    }
    let edge = time_option(&args.edge, "edge")?.unwrap_or(DEFAULT_EDGE_S);
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
    let frequency = options.nominal.map_or(mains.frequency_hz, |n| n.1);
    let profile = match &args.event_file {
        Some(path) => {
            let text = std::fs::read_to_string(path)
                .map_err(|e| format!("cannot read event file {}: {e}", path.display()))?;
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
    let m = &result.measurements;
    if args.json {
        let mut value = serde_json::to_value(m).unwrap_or_default();
        if let serde_json::Value::Object(map) = &mut value {
            let extra = serde_json::json!({
                "circuit": name,
                "event": result.event,
                "nominal_rms_v": result.nominal_rms_v,
                "frequency_hz": result.frequency_hz,
                "phase_deg": profile.phase_deg,
                "onset_s": result.onset_s,
                "event_end_s": result.event_end_s,
                "run_end_s": result.run_end_s,
                "settled_at_s": result.settled_at_s,
                "power_up_limit_s": result.settle_limit_s,
                "restore_limit_s": result.restore_limit_s,
                "settled_after": result.settled_after,
                "min_rail_v": result.min_rail_v,
                "rail": result.rail,
                "comparator_toggles": result.comparator_toggles,
                "stats": result.stats,
                "wall_time_s": wall,
                "trace": args.trace.as_ref().map(|p| p.display().to_string()),
                "plot": args.plot.as_ref().map(|p| p.display().to_string()),
            });
            if let serde_json::Value::Object(extra) = extra {
                map.extend(extra);
            }
        }
        say!(out, "{}", pretty_json(&value));
        return Ok(out);
    }
    let ms = |v: Option<f64>| v.map_or("-".to_string(), |v| format!("{v:.2} ms"));
    say!(out, "{name}: {}", circuit.title);
    say!(
        out,
        "event {} on {:.1} V / {} Hz, onset at {:.4} s (load connected and settled at {:.3} s), event end at {:.4} s",
        result.event,
        result.nominal_rms_v,
        result.frequency_hz,
        result.onset_s,
        result.settled_at_s,
        result.event_end_s
    );
    say!(out);
    say!(
        out,
        "  tripped                 {}",
        if m.tripped {
            "yes"
        } else {
            "no (rode through)"
        }
    );
    say!(out, "  trip latency            {}", ms(m.trip_latency_ms));
    let restore = if m.tripped && !m.load_connected_at_end {
        format!("not reconnected within {} s", result.restore_limit_s)
    } else if m.tripped && m.restore_latency_ms.is_none() {
        "- (reconnected for good before the event ended)".to_string()
    } else {
        ms(m.restore_latency_ms)
    };
    say!(out, "  restore latency         {restore}");
    if m.reconnections.len() > 1 || (m.tripped && m.restore_latency_ms.is_none()) {
        for r in &m.reconnections {
            let after = match (r.after_disturbance, r.latency_ms) {
                (Some(k), Some(l)) => format!("{l:.2} ms after disturbance {k} ended"),
                _ => "before the first disturbance ended".to_string(),
            };
            let during = if r.during_disturbance {
                ", during a disturbance"
            } else {
                ""
            };
            say!(
                out,
                "  reconnected             {:.2} ms after onset ({after}{during})",
                r.since_onset_ms
            );
        }
    }
    say!(out, "  relay release time      {}", ms(m.release_time_ms));
    say!(out, "  relay operate time      {}", ms(m.operate_time_ms));
    say!(out, "  contact bounce          {}", ms(m.bounce_ms));
    say!(out, "  armature transitions    {}", m.relay_transitions);
    say!(
        out,
        "  load path               opened {}, closed {} (bounce excluded)",
        m.load_path_openings,
        m.load_path_closings
    );
    say!(
        out,
        "  chatter                 {}",
        if m.chatter {
            "YES (the load path opened or closed more than once per disturbance)"
        } else {
            "no"
        }
    );
    say!(
        out,
        "  load interruption       {:.2} ms",
        m.load_interruption_ms
    );
    if let (Some(v), Some(rail)) = (result.min_rail_v, &result.rail) {
        say!(out, "  minimum rail ({rail})      {v:.3} V");
    }
    for (comparator, n) in &result.comparator_toggles {
        say!(out, "  {comparator:<22}  {n} output toggles");
    }
    say!(
        out,
        "\nrun ended at {:.3} s ({}); {} steps, {:.3} s wall",
        result.run_end_s,
        if result.settled_after {
            "restored and settled"
        } else {
            "limit reached before the protector restored and settled"
        },
        result.stats.accepted_steps,
        wall
    );
    if let Some(path) = &args.trace {
        say!(
            out,
            "trace: {} rows written to {}",
            result.trace.time.len(),
            path.display()
        );
    }
    if let Some(path) = &args.plot {
        say!(out, "plot: {}", path.display());
    }
    Ok(out)
}
