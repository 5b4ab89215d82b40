//! `sagtrip replay`: drive the protector with a recording.

use super::recording::*;
use super::*;
use sagtrip::scenario::{ReplayReport, TraceOut};

#[derive(Args)]
pub(crate) struct ReplayArgs {
    #[command(flatten)]
    input: RecordingInput,
    #[command(flatten)]
    circuit: CircuitArgs,
    /// Declared supply, e.g. 230V/50Hz (default: the circuit's mains source).
    #[arg(long, allow_hyphen_values = true)]
    nominal: Option<String>,
    /// Write the replayed waveforms (mains, rail, comparator outputs) to this CSV file.
    #[arg(long)]
    trace: Option<PathBuf>,
    /// Draw Urms(1/2) with the events and the trips, and the events on the ITI curve, into
    /// FILE.svg or FILE.png.
    #[arg(long)]
    plot: Option<PathBuf>,
    /// Print the result as JSON.
    #[arg(long)]
    json: bool,
    #[command(flatten)]
    limits: LimitArgs,
}

pub(crate) fn replay_command(args: &ReplayArgs) -> Outcome {
    refuse_overwriting_inputs(
        &[
            ("--trace", args.trace.as_deref()),
            ("--plot", args.plot.as_deref()),
        ],
        &[Some(args.input.recording.as_path()), args.circuit.path()],
    )?;
    let (circuit, name) = args.circuit.load()?;
    let options = args.limits.options(args.nominal.as_deref())?;
    let started = Instant::now();
    let settled =
        sagtrip::scenario::settle(&circuit, &options).map_err(|e| scenario_failure(&name, e))?;
    let scaled = open_scaled(&args.input)?;
    check_recording_frequency(
        scaled.lead_frequency_hz,
        settled.frequency_hz,
        "the protector's supply",
    )?;
    let (rate, how, description) = (scaled.rate, scaled.how.clone(), scaled.description.clone());
    let probes = args.trace.as_ref().map(|_| {
        let mut p = vec![Probe::Voltage {
            node: circuit.node("line").unwrap_or(1),
        }];
        p.extend(sagtrip::plot::plot_probes(&circuit));
        p.dedup();
        p
    });
    let thresholds = thresholds_of(&args.input)?;
    // A progress bar on the terminal (indicatif draws nothing when stderr is not one), in
    // seconds of recording; its length is known for WAV files, whose header gives it.
    let total_s = scaled.rest.expected_len.map(|n| n as f64 / rate);
    let bar = match total_s {
        Some(total) if !args.json => indicatif::ProgressBar::new(total.ceil() as u64),
        Some(_) => indicatif::ProgressBar::hidden(),
        None if !args.json => indicatif::ProgressBar::no_length(),
        None => indicatif::ProgressBar::hidden(),
    };
    bar.set_style(
        indicatif::ProgressStyle::with_template(if total_s.is_some() {
            "{bar:40} {pos}/{len} s of recording, {elapsed} elapsed, about {eta} left"
        } else {
            "{spinner} {pos} s of recording, {elapsed} elapsed"
        })
        .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar()),
    );
    let mut progress = |s: f64| bar.set_position(s as u64);
    let samples = scaled.volts();
    // With --trace the waveforms stream to the file as they are simulated (memory stays
    // bounded however long the recording); the file appears only if the replay succeeds.
    let replay = match (&args.trace, probes) {
        (Some(path), Some(probes)) => {
            let mut outcome = None;
            let written = write_atomic(path, |w| {
                let r = settled.replay_traced(
                    samples,
                    rate,
                    thresholds.clone(),
                    Some(TraceOut {
                        probes,
                        stream: Some(w),
                    }),
                    &mut progress,
                );
                let failed = r.is_err();
                outcome = Some(r);
                if failed {
                    Err(std::io::Error::other("the replay failed"))
                } else {
                    Ok(())
                }
            });
            match (outcome, written) {
                (Some(Err(e)), _) => Err(e),
                (_, Err(e)) => {
                    bar.finish_and_clear();
                    return Err(format!("cannot write trace {}: {e}", path.display()).into());
                }
                (Some(ok), Ok(())) => ok,
                (None, Ok(())) => Err(sagtrip::scenario::ReplayError::Trace(
                    "the trace file was written without a replay".into(),
                )),
            }
        }
        _ => settled.replay_traced(samples, rate, thresholds.clone(), None, &mut progress),
    }
    .map_err(|e| {
        let message = format!("{}: {e}", args.input.recording.display());
        match e {
            sagtrip::scenario::ReplayError::Simulation(_) => Failure::Run(message),
            _ => Failure::Input(message),
        }
    });
    bar.finish_and_clear();
    let replay = replay?;
    if let Some(path) = &args.plot {
        let plot = sagtrip::plot::RecordingPlot {
            title: format!(
                "{} through {}",
                args.input.recording.display(),
                circuit.title
            ),
            detection: &replay.detection,
            declared_v: settled.rms,
            thresholds: &thresholds,
            trips: replay.trips.iter().map(|t| t.time_s).collect(),
            reconnections: replay
                .trips
                .iter()
                .filter_map(|t| t.reconnected_s)
                .collect(),
            tripped: Some(replay.responses.iter().map(|r| r.tripped).collect()),
        };
        write_plot(
            path,
            |p| sagtrip::plot::recording_png(&plot, p),
            || sagtrip::plot::recording_svg(&plot),
        )?;
    }
    let wall = started.elapsed().as_secs_f64();
    let recording = args.input.recording.display().to_string();
    let report = ReplayReport {
        name: &name,
        title: &circuit.title,
        recording: &recording,
        format: &description,
        scale: &how,
        replay: &replay,
        wall_s: wall,
    };
    Ok(if args.json {
        format!("{}\n", pretty_json(&report.json()))
    } else {
        report.text()
    })
}
