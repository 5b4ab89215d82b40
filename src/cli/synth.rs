//! `sagtrip synth`: write a supply event as a WAV recording.

use super::*;

#[derive(Args)]
pub(crate) struct SynthArgs {
    /// The event, as for `run --event` (compact spec or preset name).
    spec: String,
    /// The WAV file to write.
    #[arg(long)]
    out: PathBuf,
    /// Nominal supply (default 230V/50Hz).
    #[arg(long, default_value = "230V/50Hz", allow_hyphen_values = true)]
    nominal: String,
    /// Samples per second.
    #[arg(long, default_value_t = 10_000, allow_hyphen_values = true)]
    rate: u32,
    /// Sample encoding.
    #[arg(long, value_enum, default_value_t = FormatArg::Int16)]
    format: FormatArg,
    /// Volts represented by a full-scale sample (default: twice the nominal peak).
    #[arg(long, allow_hyphen_values = true)]
    volts_per_full_scale: Option<String>,
    /// Nominal supply before the event (default 10cyc).
    #[arg(long, default_value = "10cyc", allow_hyphen_values = true)]
    lead: String,
    /// Nominal supply after the event (default 50cyc).
    #[arg(long, default_value = "50cyc", allow_hyphen_values = true)]
    tail: String,
    /// Rise and fall time of abrupt changes (default 5us).
    #[arg(long, allow_hyphen_values = true)]
    edge: Option<String>,
    /// Harmonics to add, ORDER:PERCENT of the fundamental, comma-separated (e.g. 3:5,5:3).
    #[arg(long, allow_hyphen_values = true)]
    harmonics: Option<String>,
    /// Uniform noise to add, percent of the nominal peak (reproducible: fixed seed).
    #[arg(long, default_value_t = 0.0, allow_hyphen_values = true)]
    noise: f64,
}

#[derive(Clone, Copy, ValueEnum)]
pub(crate) enum FormatArg {
    /// 16-bit integer samples.
    Int16,
    /// 24-bit integer samples.
    Int24,
    /// 32-bit float samples.
    Float32,
}

pub(crate) fn synth(args: &SynthArgs) -> Outcome {
    use sagtrip::synth::{samples, wav_bytes, SampleFormat, SynthOptions};
    let mut out = String::new();
    let (rms, frequency) = nominal_option(&args.nominal)?;
    let edge = time_option(args.edge.as_deref(), "edge")?.unwrap_or(DEFAULT_EDGE_S);
    let profile = resolve(&args.spec, frequency, edge).map_err(|e| format!("event: {e}"))?;
    profile
        .check(frequency)
        .map_err(|e| format!("event: {e}"))?;
    if !(1000..=sagtrip::synth::MAX_SAMPLE_RATE).contains(&args.rate) {
        return Err(format!(
            "--rate {}: allowed from 1000 to {} samples per second",
            args.rate,
            sagtrip::synth::MAX_SAMPLE_RATE
        )
        .into());
    }
    let full_scale = match &args.volts_per_full_scale {
        Some(text) => parse_value(text, Quantity::Voltage)
            .map_err(|e| format!("--volts-per-full-scale: {e}"))
            .and_then(|v| {
                if v > 0.0 {
                    Ok(v)
                } else {
                    Err("--volts-per-full-scale must be positive".to_string())
                }
            })?,
        None => SynthOptions::default_full_scale(rms),
    };
    let options = SynthOptions {
        rms_v: rms,
        frequency_hz: frequency,
        sample_rate: args.rate,
        lead_s: duration_option(&args.lead, "lead", frequency)?,
        tail_s: duration_option(&args.tail, "tail", frequency)?,
        volts_per_full_scale: full_scale,
        format: match args.format {
            FormatArg::Int16 => SampleFormat::Int16,
            FormatArg::Int24 => SampleFormat::Int24,
            FormatArg::Float32 => SampleFormat::Float32,
        },
        harmonics: match &args.harmonics {
            None => Vec::new(),
            Some(text) => text
                .split(',')
                .map(|h| {
                    let (order, pct) = h.split_once(':')?;
                    let order = order.trim().parse::<u32>().ok()?;
                    let pct = pct.trim().trim_end_matches('%').parse::<f64>().ok()?;
                    // Orders from 2 to 100 (the 100th of 50 Hz is 5 kHz), up to 100%.
                    ((2..=100).contains(&order) && (0.0..=100.0).contains(&pct))
                        .then_some((order, pct / 100.0))
                })
                .collect::<Option<Vec<_>>>()
                .ok_or_else(|| {
                    format!(
                        "--harmonics {text}: expected ORDER:PERCENT pairs, e.g. 3:5,5:3, with \
                         orders from 2 to 100 and percentages from 0 to 100"
                    )
                })?,
        },
        noise: if args.noise >= 0.0 {
            args.noise / 100.0
        } else {
            return Err("--noise must not be negative".into());
        },
    };
    let count = sagtrip::synth::sample_count(&profile, &options);
    if count > sagtrip::synth::MAX_SAMPLES {
        return Err(format!(
            "the recording would hold {count} samples: at most {} (shorten the event, the lead \
             or the tail, or lower --rate)",
            sagtrip::synth::MAX_SAMPLES
        )
        .into());
    }
    let volts = samples(&profile, &options);
    let bytes = wav_bytes(&volts, &options).map_err(|e| e.to_string())?;
    write_atomic(&args.out, |w| w.write_all(&bytes))
        .map_err(|e| format!("cannot write {}: {e}", args.out.display()))?;
    let period = 1.0 / frequency;
    let onset = (options.lead_s / period).round() * period
        + profile.phase_deg.rem_euclid(360.0) / 360.0 * period;
    say!(
        out,
        "{}: event {} on {rms} V / {frequency} Hz, {} samples at {} Hz ({:.3} s), {}",
        args.out.display(),
        profile.spec(),
        volts.len(),
        args.rate,
        volts.len() as f64 / f64::from(args.rate),
        match args.format {
            FormatArg::Int16 => "16-bit integer",
            FormatArg::Int24 => "24-bit integer",
            FormatArg::Float32 => "32-bit float",
        }
    );
    say!(
        out,
        "scale: {full_scale:.3} V per full scale (a sample of 1.0 is {full_scale:.3} V)"
    );
    say!(out, "onset at {onset:.6} s into the file");
    Ok(out)
}
