//! `sagtrip detect`: find dips, swells and interruptions in a recording.

use super::recording::*;
use super::*;

#[derive(Args)]
pub(crate) struct DetectArgs {
    #[command(flatten)]
    input: RecordingInput,
    /// Declared supply, e.g. 230V/50Hz (default: the --calibrate voltage, or the standard
    /// voltage nearest the first cycles, at the measured frequency's 50 or 60 Hz). A
    /// recording whose frequency differs from it by more than 5% is refused.
    #[arg(long, allow_hyphen_values = true)]
    nominal: Option<String>,
    /// Write the events to this CSV file.
    #[arg(long)]
    out: Option<PathBuf>,
    /// Draw Urms(1/2) with the events, and the events on the ITI curve, into FILE.svg or
    /// FILE.png.
    #[arg(long)]
    plot: Option<PathBuf>,
    /// Print the result as JSON.
    #[arg(long)]
    json: bool,
}

pub(crate) fn detect_command(args: &DetectArgs) -> Outcome {
    use sagtrip::detect::Detector;
    refuse_overwriting_inputs(
        &[
            ("--out", args.out.as_deref()),
            ("--plot", args.plot.as_deref()),
        ],
        &[Some(args.input.recording.as_path())],
    )?;
    let scaled = open_scaled(&args.input)?;
    let measured_hz = scaled.lead_frequency_hz;
    let (declared, frequency, declared_how) = match &args.nominal {
        Some(text) => {
            let (v, f) = nominal_option(text)?;
            check_recording_frequency(measured_hz, f, "--nominal")?;
            (v, f, "given")
        }
        None => {
            let measured = measured_hz.ok_or(
                "the recording's first cycles have no two rising zero crossings to measure its \
                 frequency: give the declared supply with --nominal (e.g. 230V/50Hz)",
            )?;
            let f = if (measured - 50.0).abs() < (measured - 60.0).abs() {
                50.0
            } else {
                60.0
            };
            check_recording_frequency(Some(measured), f, "the nearest standard frequency")?;
            match scaled.calibrated_to {
                Some(v) => (v, f, "from --calibrate and the measured frequency"),
                None => {
                    let rms = whole_cycle_rms(&scaled.lead).unwrap_or(0.0) * scaled.scale;
                    (
                        sagtrip::detect::nearest_standard_voltage(rms),
                        f,
                        "the standard voltage nearest the first cycles, and the measured frequency",
                    )
                }
            }
        }
    };
    let (rate, how, description) = (scaled.rate, scaled.how.clone(), scaled.description.clone());
    let thresholds = thresholds_of(&args.input)?;
    let mut detector = Detector::new(rate, declared, frequency, thresholds.clone());
    for v in scaled.volts() {
        detector.push(v.map_err(|e| e.to_string())?);
    }
    let d = detector.finish();
    d.check_mains()
        .map_err(|e| format!("{}: {e}", args.input.recording.display()))?;
    if let Some(path) = &args.plot {
        let plot = sagtrip::plot::RecordingPlot {
            title: format!("{}: events", args.input.recording.display()),
            detection: &d,
            declared_v: declared,
            thresholds: &thresholds,
            trips: Vec::new(),
            reconnections: Vec::new(),
            tripped: None,
        };
        write_plot(
            path,
            |p| sagtrip::plot::recording_png(&plot, p),
            || sagtrip::plot::recording_svg(&plot),
        )?;
    }
    if let Some(path) = &args.out {
        write_atomic(path, |w| sagtrip::detect::write_events_csv(&d, w))
            .map_err(|err| format!("cannot write {}: {err}", path.display()))?;
    }
    let recording = args.input.recording.display().to_string();
    let events_file = args.out.as_ref().map(|p| p.display().to_string());
    let report = sagtrip::detect::DetectionReport {
        recording: &recording,
        format: &description,
        scale: &how,
        declared_v: declared,
        frequency_hz: frequency,
        declared_from: declared_how,
        detection: &d,
        events_file: events_file.as_deref(),
    };
    Ok(if args.json {
        format!("{}\n", pretty_json(&report.json()))
    } else {
        report.text()
    })
}
