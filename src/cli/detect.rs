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
    #[arg(long)]
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
    let mut out = String::new();
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
        write_atomic(path, |w| {
            writeln!(
                w,
                "kind,start_s,duration_s,level_pct,ieee_1159,en_50160,phase_jump_deg,open_at_end"
            )?;
            for e in &d.events {
                writeln!(
                    w,
                    "{},{},{},{},{},{},{},{}",
                    e.kind.name(),
                    e.start_s,
                    e.duration_s,
                    e.level_pct,
                    e.ieee_1159.replace(',', ";"),
                    e.en_50160.replace(',', ";"),
                    e.phase_jump_deg.map_or(String::new(), |j| j.to_string()),
                    e.open_at_end
                )?;
            }
            Ok(())
        })
        .map_err(|err| format!("cannot write {}: {err}", path.display()))?;
    }
    let frequencies = d.frequency_intervals();
    let (fmin, fmax) = frequencies
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &f| {
            (a.min(f), b.max(f))
        });
    let fmean = frequencies.iter().sum::<f64>() / frequencies.len().max(1) as f64;
    if args.json {
        let value = serde_json::json!({
            "recording": args.input.recording.display().to_string(),
            "format": description,
            "scale": how,
            "declared_rms_v": declared,
            "frequency_hz": frequency,
            "declared_from": declared_how,
            "duration_s": d.duration_s,
            "samples": d.samples,
            "measured_frequency_hz": { "mean": fmean, "min": fmin, "max": fmax },
            "events": d.events,
        });
        say!(out, "{}", pretty_json(&value));
        return Ok(out);
    }
    say!(
        out,
        "{}: {description}, {:.3} s",
        args.input.recording.display(),
        d.duration_s
    );
    say!(out, "scale: {how}");
    say!(
        out,
        "declared {declared} V / {frequency} Hz ({declared_how}); measured frequency {fmean:.3} Hz (10 s intervals from {fmin:.3} to {fmax:.3} Hz, cycles near events left out)"
    );
    if d.events.is_empty() {
        say!(out, "\nno dips, swells or interruptions");
    } else {
        say!(
            out,
            "\n{:<13} {:>11} {:>11} {:>9}  {:<36} {:<8} {}",
            "event",
            "start (s)",
            "duration",
            "level",
            "IEEE 1159",
            "EN 50160",
            "phase jump"
        );
        for e in &d.events {
            say!(
                out,
                "{:<13} {:>11.4} {:>9.1}ms {:>8.2}%  {:<36} {:<8} {}{}",
                e.kind.name(),
                e.start_s,
                e.duration_s * 1e3,
                e.level_pct,
                e.ieee_1159,
                e.en_50160,
                e.phase_jump_deg
                    .map_or("-".to_string(), |j| format!("{j:+.1} deg")),
                if e.open_at_end {
                    " (still open at the end)"
                } else {
                    ""
                }
            );
        }
    }
    if let Some(path) = &args.out {
        say!(out, "\nevents written to {}", path.display());
    }
    Ok(out)
}
