//! `sagtrip thresholds`: the static trip and reset voltages and slow ramps.

use super::*;

#[derive(Args)]
pub(crate) struct ThresholdsArgs {
    /// Circuit file (TOML); the built-in reference guard when omitted.
    #[arg(long)]
    circuit: Option<PathBuf>,
    /// Nominal supply, e.g. 230V/50Hz (default: the circuit's mains source).
    #[arg(long)]
    nominal: Option<String>,
    /// Bisection resolution, volts RMS.
    #[arg(long, default_value = "0.1V")]
    resolution: String,
    /// How long each test level is held: longer than the protector's trip and reconnection
    /// delays (e.g. 2s, 100cyc).
    #[arg(long, default_value = "2s")]
    hold: String,
    /// Time of each slow ramp, out through the threshold and back.
    #[arg(long, default_value = "10s")]
    ramp: String,
    /// Draw the trip and reset voltages on a voltage axis into FILE.svg or FILE.png.
    #[arg(long)]
    plot: Option<PathBuf>,
    /// Print the result as JSON.
    #[arg(long)]
    json: bool,
    #[command(flatten)]
    limits: LimitArgs,
}

pub(crate) fn thresholds_command(args: &ThresholdsArgs) -> Outcome {
    use sagtrip::thresholds::{find, SideThresholds, ThresholdOptions};
    let mut out = String::new();
    refuse_overwriting_inputs(
        &[("--plot", args.plot.as_deref())],
        &[args.circuit.as_deref()],
    )?;
    let (circuit, name) = load_circuit(args.circuit.as_deref())?;
    let options = args.limits.options(args.nominal.as_deref())?;
    if let Some(path) = &args.plot {
        check_plot_name(path)?;
    }
    let started = Instant::now();
    let settled =
        sagtrip::scenario::settle(&circuit, &options).map_err(|e| scenario_failure(&name, e))?;
    let frequency = settled.frequency_hz;
    let resolution_v = parse_value(&args.resolution, Quantity::Voltage)
        .map_err(|e| format!("--resolution: {e}"))?;
    if !resolution_v.is_finite() || resolution_v <= 0.0 {
        return Err(format!("--resolution {}: must be above 0 V", args.resolution).into());
    }
    let threshold_options = ThresholdOptions {
        resolution_v,
        hold_s: duration_option(&args.hold, "hold", frequency)?,
        ramp_s: duration_option(&args.ramp, "ramp", frequency)?,
        ..ThresholdOptions::default()
    };
    if threshold_options.hold_s <= 0.0 || threshold_options.ramp_s <= 0.0 {
        return Err("--hold and --ramp must be longer than 0".into());
    }
    let result = find(&settled, &circuit, &threshold_options)
        .map_err(|e| Failure::Run(format!("{name}: {e}")))?;
    if let Some(path) = &args.plot {
        let title = format!("Static thresholds: {}", circuit.title);
        write_plot(
            path,
            |p| sagtrip::plot::thresholds_png(&result, &title, p),
            || sagtrip::plot::thresholds_svg(&result, &title),
        )?;
    }
    let wall = started.elapsed().as_secs_f64();
    if args.json {
        let mut value = serde_json::to_value(&result).unwrap_or_default();
        value["circuit"] = serde_json::json!(name);
        value["wall_time_s"] = serde_json::json!(wall);
        say!(out, "{}", pretty_json(&value));
        return Ok(out);
    }
    say!(out, "{name}: {}", circuit.title);
    say!(
        out,
        "static thresholds on a {:.1} V {:.0} Hz supply: each level held {} s, bisection to {} V",
        result.nominal_rms_v,
        result.frequency_hz,
        result.hold_s,
        result.resolution_v
    );
    say!(
        out,
        "\n{:<6} {:>10} {:>8} {:>10} {:>8} {:>11} {:>6}",
        "side",
        "trip (V)",
        "trip %",
        "reset (V)",
        "reset %",
        "hysteresis",
        "tests"
    );
    let label = |s: &SideThresholds| match s.side {
        sagtrip::thresholds::Side::Under => "under",
        sagtrip::thresholds::Side::Over => "over",
    };
    for s in [&result.under, &result.over] {
        let v = |t: Option<sagtrip::thresholds::Threshold>| {
            t.map_or(("-".to_string(), "-".to_string()), |t| {
                (format!("{:.1}", t.volts), format!("{:.2}", t.percent))
            })
        };
        let (tv, tp) = v(s.trip);
        let (rv, rp) = v(s.reset);
        let tests = s.trip.map_or(0, |t| t.tests) + s.reset.map_or(0, |t| t.tests);
        say!(
            out,
            "{:<6} {:>10} {:>8} {:>10} {:>8} {:>11} {:>6}",
            label(s),
            tv,
            tp,
            rv,
            rp,
            s.hysteresis_v
                .map_or("-".to_string(), |h| format!("{h:.1} V")),
            tests
        );
    }
    for s in [&result.under, &result.over] {
        if let Some(note) = &s.note {
            say!(out, "{}: {note}", label(s));
        }
    }
    let ramps: Vec<_> = [&result.under, &result.over]
        .into_iter()
        .filter_map(|s| s.ramp.as_ref().map(|r| (label(s), r)))
        .collect();
    if !ramps.is_empty() {
        say!(
            out,
            "\nslow ramps: from nominal over {} s to 5% beyond the trip, held {} s, back over {} s",
            threshold_options.ramp_s,
            threshold_options.hold_s,
            threshold_options.ramp_s
        );
        say!(
            out,
            "{:<6} {:>9} {:>12} {:>12} {:>12}  {}",
            "side",
            "rate V/s",
            "opened at",
            "closed at",
            "armature",
            "chatter"
        );
        for (side, r) in ramps {
            let volts = |v: Option<f64>| v.map_or("-".to_string(), |v| format!("{v:.1} V"));
            let toggles: Vec<String> = r
                .comparator_toggles
                .iter()
                .map(|(n, k)| format!("{n} {k}"))
                .collect();
            let verdict = if r.relay_chatters {
                "load path chatters"
            } else if r.most_toggles() > 2 {
                "none, but a comparator toggled (a slower ramp may make the load path chatter)"
            } else {
                "none"
            };
            say!(
                out,
                "{:<6} {:>9.2} {:>12} {:>12} {:>12}  {verdict} (comparator toggles: {})",
                side,
                r.rate_v_per_s,
                volts(r.trip_v),
                volts(r.reconnect_v),
                format!("{} moves", r.relay_transitions),
                toggles.join(", ")
            );
        }
        say!(
            out,
            "(the load opens and closes after the protector's own delays, so on a ramp it does \
             so beyond the static voltages by the ramp rate times the delay)"
        );
    }
    say!(out, "\n{wall:.1} s wall");
    Ok(out)
}
