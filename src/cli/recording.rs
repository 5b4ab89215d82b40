//! Reading a recording for `detect` and `replay`: the scale, the declared supply.

use super::*;

/// Where a recording comes from and how to scale it.
#[derive(Args)]
pub(crate) struct RecordingInput {
    /// The recording: a .wav file, or a .csv file with a time and a voltage column.
    pub(crate) recording: PathBuf,
    /// WAV channel to read, counting from 0.
    #[arg(long, default_value_t = 0, allow_hyphen_values = true)]
    pub(crate) channel: usize,
    /// Volts of a full-scale WAV sample (for CSV: a factor on the voltage column).
    #[arg(long, conflicts_with = "calibrate", allow_hyphen_values = true)]
    pub(crate) volts_per_full_scale: Option<String>,
    /// Scale so that the RMS of the first whole cycles equals this, e.g. 230V.
    #[arg(long, allow_hyphen_values = true)]
    pub(crate) calibrate: Option<String>,
    /// Header of the CSV time column (seconds).
    #[arg(long, default_value = "time_s", allow_hyphen_values = true)]
    pub(crate) time_column: String,
    /// Header of the CSV voltage column.
    #[arg(long, default_value = "voltage_V", allow_hyphen_values = true)]
    pub(crate) voltage_column: String,
    /// Dip threshold, % of the declared voltage.
    #[arg(long, default_value_t = 90.0, allow_hyphen_values = true)]
    pub(crate) dip: f64,
    /// Swell threshold, % of the declared voltage.
    #[arg(long, default_value_t = 110.0, allow_hyphen_values = true)]
    pub(crate) swell: f64,
    /// Interruption threshold, % of the declared voltage.
    #[arg(long, default_value_t = 10.0, allow_hyphen_values = true)]
    pub(crate) interruption: f64,
    /// Hysteresis, % of the declared voltage.
    #[arg(long, default_value_t = 2.0, allow_hyphen_values = true)]
    pub(crate) hysteresis: f64,
    /// Smallest phase jump flagged, degrees.
    #[arg(long, default_value_t = 10.0, allow_hyphen_values = true)]
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

/// A voltage option that must be positive and finite (at most 1 MV).
fn positive_volts(text: &str, option: &str) -> Result<f64, String> {
    let v = parse_value(text, Quantity::Voltage).map_err(|e| format!("--{option}: {e}"))?;
    if v.is_finite() && v > 0.0 && v <= 1e6 {
        Ok(v)
    } else {
        Err(format!("--{option} {text}: allowed above 0 V up to 1 MV"))
    }
}

/// Opens the recording with the scale the options ask for.
pub(crate) fn open_scaled(input: &RecordingInput) -> Result<Scaled, String> {
    use sagtrip::recording::{CsvColumns, Scale, ScaleError};
    let columns = CsvColumns {
        time: input.time_column.clone(),
        voltage: input.voltage_column.clone(),
    };
    let scale = match (&input.volts_per_full_scale, &input.calibrate) {
        (Some(text), _) => Some(Scale::VoltsPerFullScale(positive_volts(
            text,
            "volts-per-full-scale",
        )?)),
        (None, Some(text)) => Some(Scale::CalibrateTo(positive_volts(text, "calibrate")?)),
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

/// The detection thresholds the options ask for, refused unless they make sense together:
/// 0 < interruption < dip < 100 < swell, a hysteresis that leaves the dip's end below 100%
/// and the swell's above it, a phase jump from 0 to 180 degrees.
pub(crate) fn thresholds_of(input: &RecordingInput) -> Result<sagtrip::detect::Thresholds, String> {
    let (dip, swell, interruption, hysteresis, jump) = (
        input.dip,
        input.swell,
        input.interruption,
        input.hysteresis,
        input.phase_jump,
    );
    let all_finite = [dip, swell, interruption, hysteresis, jump]
        .iter()
        .all(|x| x.is_finite());
    let fits = all_finite
        && interruption > 0.0
        && interruption < dip
        && dip < 100.0
        && swell > 100.0
        && swell <= 1000.0
        && hysteresis >= 0.0
        && dip + hysteresis < 100.0
        && swell - hysteresis > 100.0
        && (0.0..=180.0).contains(&jump);
    if !fits {
        return Err(format!(
            "--interruption {interruption}, --dip {dip}, --swell {swell}, --hysteresis \
             {hysteresis}, --phase-jump {jump}: need 0 < interruption < dip < 100 < swell \
             (percent), dip + hysteresis < 100 < swell - hysteresis, and a phase jump from 0 \
             to 180 degrees"
        ));
    }
    Ok(sagtrip::detect::Thresholds {
        dip_pct: dip,
        swell_pct: swell,
        interruption_pct: interruption,
        hysteresis_pct: hysteresis,
        phase_jump_deg: jump,
    })
}
