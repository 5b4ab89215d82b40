//! Reading a recording for `detect` and `replay`: the scale, the declared supply.

use super::*;

/// Where a recording comes from and how to scale it.
#[derive(Args)]
pub(crate) struct RecordingInput {
    /// The recording: a .wav file, or a .csv file with a time and a voltage column.
    pub(crate) recording: PathBuf,
    /// WAV channel to read, counting from 0.
    #[arg(long, default_value_t = 0)]
    pub(crate) channel: usize,
    /// Volts of a full-scale WAV sample (for CSV: a factor on the voltage column).
    #[arg(long, conflicts_with = "calibrate")]
    pub(crate) volts_per_full_scale: Option<String>,
    /// Scale so that the RMS of the first whole cycles equals this, e.g. 230V.
    #[arg(long)]
    pub(crate) calibrate: Option<String>,
    /// Header of the CSV time column (seconds).
    #[arg(long, default_value = "time_s")]
    pub(crate) time_column: String,
    /// Header of the CSV voltage column.
    #[arg(long, default_value = "voltage_V")]
    pub(crate) voltage_column: String,
    /// Dip threshold, % of the declared voltage.
    #[arg(long, default_value_t = 90.0)]
    pub(crate) dip: f64,
    /// Swell threshold, % of the declared voltage.
    #[arg(long, default_value_t = 110.0)]
    pub(crate) swell: f64,
    /// Interruption threshold, % of the declared voltage.
    #[arg(long, default_value_t = 10.0)]
    pub(crate) interruption: f64,
    /// Hysteresis, % of the declared voltage.
    #[arg(long, default_value_t = 2.0)]
    pub(crate) hysteresis: f64,
    /// Smallest phase jump flagged, degrees.
    #[arg(long, default_value_t = 10.0)]
    pub(crate) phase_jump: f64,
}

/// RMS over the whole cycles (rising zero crossing to rising zero crossing) of `samples`.
pub(crate) fn whole_cycle_rms(samples: &[f64]) -> Option<f64> {
    let rising: Vec<usize> = (1..samples.len())
        .filter(|&i| samples[i - 1] < 0.0 && samples[i] >= 0.0)
        .collect();
    if rising.len() < 2 {
        return None;
    }
    let (a, b) = (rising[0], rising[rising.len() - 1]);
    let sum: f64 = samples[a..b].iter().map(|v| v * v).sum();
    Some((sum / (b - a) as f64).sqrt())
}

/// An opened, scaled recording: its first samples read ahead for calibration.
pub(crate) struct Scaled {
    pub(crate) lead: Vec<f64>,
    /// The `--calibrate` voltage, if the scale was calibrated.
    pub(crate) calibrated_to: Option<f64>,
    /// The frequency of the first whole cycles, hertz.
    pub(crate) lead_frequency_hz: Option<f64>,
    pub(crate) rest: sagtrip::recording::Samples,
    pub(crate) scale: f64,
    pub(crate) how: String,
    pub(crate) rate: f64,
    pub(crate) description: String,
}

impl Scaled {
    /// Every sample in volts.
    pub(crate) fn volts(self) -> impl Iterator<Item = Result<f64, String>> {
        let scale = self.scale;
        self.lead.into_iter().map(move |v| Ok(v * scale)).chain(
            self.rest
                .map(move |s| s.map(|v| v * scale).map_err(|e| e.to_string())),
        )
    }
}

/// Refuses a recording whose first cycles' frequency differs from `expected_hz` by more
/// than 5%.
pub(crate) fn check_recording_frequency(
    measured_hz: Option<f64>,
    expected_hz: f64,
    what: &str,
) -> Result<(), String> {
    match measured_hz {
        Some(m) if (m / expected_hz - 1.0).abs() > 0.05 => Err(format!(
            "the recording's first cycles run at {m:.2} Hz, more than 5% from {what} \
             ({expected_hz} Hz)"
        )),
        _ => Ok(()),
    }
}

/// Opens a recording and works out its scale (given, calibrated on the first whole cycles
/// against `declared` volts, or 1 for a CSV column in volts).
pub(crate) fn open_scaled(input: &RecordingInput) -> Result<Scaled, String> {
    use sagtrip::recording::{open, CsvColumns};
    let columns = CsvColumns {
        time: input.time_column.clone(),
        voltage: input.voltage_column.clone(),
    };
    let mut samples = open(&input.recording, input.channel, &columns).map_err(|e| e.to_string())?;
    let rate = samples.sample_rate;
    let description = samples.description.clone();
    // Four cycles at 50 Hz (four whole ones at 60 Hz): enough to calibrate and to time the
    // supply, short enough to end before an event that a recording's lead-in precedes.
    let lead_count = (rate / 50.0 * 4.0).ceil() as usize + 2;
    let mut lead = Vec::with_capacity(lead_count);
    for s in samples.by_ref().take(lead_count) {
        lead.push(s.map_err(|e| e.to_string())?);
    }
    let (scale, how) = match (&input.volts_per_full_scale, &input.calibrate) {
        (Some(text), _) => {
            let v = parse_value(text, Quantity::Voltage)
                .map_err(|e| format!("--volts-per-full-scale: {e}"))?;
            (v, format!("{v} V per full scale (given)"))
        }
        (None, Some(text)) => {
            let target =
                parse_value(text, Quantity::Voltage).map_err(|e| format!("--calibrate: {e}"))?;
            let rms = whole_cycle_rms(&lead).filter(|r| *r > 0.0).ok_or_else(|| {
                format!(
                    "--calibrate: the recording's first {} samples hold no whole cycle to calibrate on",
                    lead.len()
                )
            })?;
            (
                target / rms,
                format!(
                    "{:.6} per unit (calibrated: the first whole cycles read {target} V rms)",
                    target / rms
                ),
            )
        }
        (None, None) if !samples.full_scale_fractions => {
            (1.0, "1 (the CSV column in volts)".to_string())
        }
        (None, None) => {
            return Err(
                "a WAV recording needs its scale: --volts-per-full-scale VOLTS or --calibrate 230V"
                    .into(),
            )
        }
    };
    let calibrated_to = match (&input.volts_per_full_scale, &input.calibrate) {
        (None, Some(text)) => parse_value(text, Quantity::Voltage).ok(),
        _ => None,
    };
    Ok(Scaled {
        lead_frequency_hz: sagtrip::detect::measured_frequency(&lead, rate),
        calibrated_to,
        lead,
        rest: samples,
        scale,
        how,
        rate,
        description,
    })
}

pub(crate) fn thresholds_of(input: &RecordingInput) -> sagtrip::detect::Thresholds {
    sagtrip::detect::Thresholds {
        dip_pct: input.dip,
        swell_pct: input.swell,
        interruption_pct: input.interruption,
        hysteresis_pct: input.hysteresis,
        phase_jump_deg: input.phase_jump,
    }
}
