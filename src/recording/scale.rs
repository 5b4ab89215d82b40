//! A recording's scale: given, or calibrated on the first whole cycles; the check of its frequency.

use super::*;

/// How the samples of a recording become volts.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Scale {
    /// Volts of a full-scale sample (for a CSV column: a factor on it).
    VoltsPerFullScale(f64),
    /// Scale so that the RMS of the first whole cycles equals this many volts.
    CalibrateTo(f64),
}

/// Why a recording could not be scaled.
#[derive(Debug, thiserror::Error)]
pub enum ScaleError {
    /// The file could not be read.
    #[error(transparent)]
    Read(#[from] RecordingError),
    /// Calibration asked, but the first samples hold no whole cycle.
    #[error("the recording's first {samples} samples hold no whole cycle to calibrate on")]
    NoWholeCycle {
        /// How many samples were looked at.
        samples: usize,
    },
    /// A WAV recording's samples are fractions of full scale: its scale must be given.
    #[error("a WAV recording needs its scale (volts per full scale, or a calibration voltage)")]
    NeedsScale,
}

/// An opened recording with its scale: its first samples read ahead (to calibrate on and
/// to time the supply), the rest still streaming.
pub struct Scaled {
    /// The first samples, as read (not yet scaled).
    pub lead: Vec<f64>,
    /// The calibration voltage, if the scale was calibrated.
    pub calibrated_to: Option<f64>,
    /// The frequency of the first whole cycles, hertz.
    pub lead_frequency_hz: Option<f64>,
    /// The samples after the lead.
    pub rest: Samples,
    /// Volts per sample unit.
    pub scale: f64,
    /// How the scale was found, for the report.
    pub how: String,
    /// Samples per second.
    pub rate: f64,
    /// What the file is, for the report.
    pub description: String,
    /// The file, for messages.
    pub path: String,
}

impl Scaled {
    /// Every sample in volts.
    /// Every sample in volts. A sample that is not finite or lies beyond
    /// [`MAX_SAMPLE_V`] is an error naming it (a corrupt sample, not a supply).
    pub fn volts(self) -> impl Iterator<Item = Result<f64, RecordingError>> {
        let (scale, rate, path) = (self.scale, self.rate, self.path);
        self.lead
            .into_iter()
            .map(Ok)
            .chain(self.rest)
            .enumerate()
            .map(move |(index, s)| {
                let v = s? * scale;
                if v.is_finite() && v.abs() <= MAX_SAMPLE_V {
                    Ok(v)
                } else {
                    Err(RecordingError::AbsurdSample {
                        path: path.clone(),
                        index,
                        time_s: index as f64 / rate,
                        volts: v,
                    })
                }
            })
    }
}

/// RMS over the whole cycles (rising zero crossing to rising zero crossing) of `samples`.
pub fn whole_cycle_rms(samples: &[f64]) -> Option<f64> {
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

/// Opens a recording and works out its scale: given, calibrated on the first whole cycles,
/// or (`None`) 1 for a CSV column in volts. The first four cycles at 50 Hz (four whole ones
/// at 60 Hz) are read ahead: enough to calibrate and to time the supply, short enough to
/// end before an event that a recording's lead-in precedes.
pub fn open_scaled(
    path: &Path,
    channel: usize,
    columns: &CsvColumns,
    scale: Option<Scale>,
) -> Result<Scaled, ScaleError> {
    let mut samples = open(path, channel, columns)?;
    let rate = samples.sample_rate;
    let description = samples.description.clone();
    let lead_count = (rate / 50.0 * 4.0).ceil() as usize + 2;
    let mut lead = Vec::with_capacity(lead_count);
    for s in samples.by_ref().take(lead_count) {
        lead.push(s?);
    }
    let (factor, how, calibrated_to) = match scale {
        Some(Scale::VoltsPerFullScale(v)) => {
            (v, format!("{v} V per full-scale sample (given)"), None)
        }
        Some(Scale::CalibrateTo(target)) => {
            let rms =
                whole_cycle_rms(&lead)
                    .filter(|r| *r > 0.0)
                    .ok_or(ScaleError::NoWholeCycle {
                        samples: lead.len(),
                    })?;
            (
                target / rms,
                format!(
                    "{:.6} V per full-scale sample (calibrated: the first whole cycles read {target} V rms)",
                    target / rms
                ),
                Some(target),
            )
        }
        None if !samples.full_scale_fractions => {
            (1.0, "1 (the CSV column in volts)".to_string(), None)
        }
        None => return Err(ScaleError::NeedsScale),
    };
    Ok(Scaled {
        lead_frequency_hz: crate::detect::measured_frequency(&lead, rate),
        calibrated_to,
        lead,
        rest: samples,
        scale: factor,
        how,
        rate,
        description,
        path: path.display().to_string(),
    })
}

/// A recording whose first cycles run more than 5% away from the frequency expected.
#[derive(Clone, Debug, PartialEq, thiserror::Error)]
#[error(
    "the recording's first cycles run at {measured_hz:.2} Hz, more than 5% from {expected_hz} Hz"
)]
pub struct FrequencyMismatch {
    /// Measured on the first whole cycles, hertz.
    pub measured_hz: f64,
    /// Expected, hertz.
    pub expected_hz: f64,
}

/// Refuses a recording whose first cycles' frequency differs from `expected_hz` by more
/// than 5% (a recording of another supply, or a wrong sample rate).
pub fn check_frequency(
    measured_hz: Option<f64>,
    expected_hz: f64,
) -> Result<(), FrequencyMismatch> {
    match measured_hz {
        Some(m) if (m / expected_hz - 1.0).abs() > 0.05 => Err(FrequencyMismatch {
            measured_hz: m,
            expected_hz,
        }),
        _ => Ok(()),
    }
}
