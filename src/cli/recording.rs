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

pub(crate) use sagtrip::recording::{whole_cycle_rms, Scaled};

/// Refuses a recording whose first cycles' frequency differs from `expected_hz` by more
/// than 5%, naming what the frequency was expected from (`what`).
pub(crate) fn check_recording_frequency(
    measured_hz: Option<f64>,
    expected_hz: f64,
    what: &str,
) -> Result<(), String> {
    sagtrip::recording::check_frequency(measured_hz, expected_hz)
        .map_err(|e| format!("{e} ({what})"))
}

/// Opens the recording with the scale the options ask for.
pub(crate) fn open_scaled(input: &RecordingInput) -> Result<Scaled, String> {
    use sagtrip::recording::{CsvColumns, Scale, ScaleError};
    let columns = CsvColumns {
        time: input.time_column.clone(),
        voltage: input.voltage_column.clone(),
    };
    let scale = match (&input.volts_per_full_scale, &input.calibrate) {
        (Some(text), _) => Some(Scale::VoltsPerFullScale(
            parse_value(text, Quantity::Voltage)
                .map_err(|e| format!("--volts-per-full-scale: {e}"))?,
        )),
        (None, Some(text)) => Some(Scale::CalibrateTo(
            parse_value(text, Quantity::Voltage).map_err(|e| format!("--calibrate: {e}"))?,
        )),
        (None, None) => None,
    };
    sagtrip::recording::open_scaled(&input.recording, input.channel, &columns, scale).map_err(|e| {
        match e {
            ScaleError::NeedsScale => {
                format!("{e}: --volts-per-full-scale VOLTS or --calibrate 230V")
            }
            ScaleError::NoWholeCycle { .. } => format!("--calibrate: {e}"),
            ScaleError::Read(e) => e.to_string(),
        }
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
