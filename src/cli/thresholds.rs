//! `sagtrip thresholds`: the static trip and reset voltages and slow ramps.

use super::*;

#[derive(Args)]
pub(crate) struct ThresholdsArgs {
    #[command(flatten)]
    circuit: CircuitArgs,
    /// Nominal supply, e.g. 230V/50Hz (default: the circuit's mains source).
    #[arg(long, allow_hyphen_values = true)]
    nominal: Option<String>,
    /// Bisection resolution, volts RMS.
    #[arg(long, default_value = "0.1V", allow_hyphen_values = true)]
    resolution: String,
    /// How long each test level is held: longer than the protector's trip and reconnection
    /// delays (e.g. 2s, 100cyc).
    #[arg(long, default_value = "2s", allow_hyphen_values = true)]
    hold: String,
    /// Time of each slow ramp, out through the threshold and back.
    #[arg(long, default_value = "10s", allow_hyphen_values = true)]
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
    use sagtrip::thresholds::{find, ThresholdOptions, ThresholdsReport};
    refuse_overwriting_inputs(&[("--plot", args.plot.as_deref())], &[args.circuit.path()])?;
    let (circuit, name) = args.circuit.load()?;
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
    // A bisection to a millivolt takes about 20 tests a side; finer says nothing more
    // about a mains threshold and would take for ever.
    if !(1e-3..=100.0).contains(&resolution_v) {
        return Err(format!(
            "--resolution {}: allowed from 1 mV to 100 V",
            args.resolution
        )
        .into());
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
    let report = ThresholdsReport {
        name: &name,
        title: &circuit.title,
        result: &result,
        ramp_s: threshold_options.ramp_s,
        wall_s: wall,
    };
    Ok(if args.json {
        format!("{}\n", pretty_json(&report.json()))
    } else {
        report.text()
    })
}
