//! Reading recorded mains waveforms as a stream of samples in volts: WAV (16, 24, 32-bit
//! integer and 32-bit float, any channel) and CSV (a time column and a voltage column).
//!
//! Samples are read one at a time, so a long recording is never held whole in memory.
//! Every problem (unsupported format, truncated data, an empty file, a non-finite sample, a
//! sample rate too low to follow the mains) is an error that names the file and, for CSV,
//! the line.

use std::fs::File;
use std::io::{BufRead, BufReader};
use std::path::Path;

/// The lowest sample rate accepted, samples per second: 20 samples per 50 Hz cycle.
pub const MIN_SAMPLE_RATE: f64 = 1000.0;

/// Why a recording cannot be read.
#[derive(Debug, thiserror::Error)]
pub enum RecordingError {
    /// The file could not be opened or read.
    #[error("{path}: {message}")]
    Io {
        /// The file.
        path: String,
        /// What failed.
        message: String,
    },
    /// The WAV data is not one we read, or broken.
    #[error("{path}: {message}")]
    Format {
        /// The file.
        path: String,
        /// What is wrong.
        message: String,
    },
    /// A CSV line is not a valid sample.
    #[error("{path}:{line}: {message}")]
    Line {
        /// The file.
        path: String,
        /// 1-based line.
        line: usize,
        /// What is wrong.
        message: String,
    },
}

/// How the columns of a CSV recording are named.
#[derive(Clone, Debug)]
pub struct CsvColumns {
    /// Header of the time column (seconds).
    pub time: String,
    /// Header of the voltage column (volts, before scaling).
    pub voltage: String,
}

impl Default for CsvColumns {
    fn default() -> Self {
        Self {
            time: "time_s".into(),
            voltage: "voltage_V".into(),
        }
    }
}

/// A stream of raw samples: full-scale fractions for WAV, the column's values for CSV.
pub struct Samples {
    /// Samples per second.
    pub sample_rate: f64,
    /// For WAV: the sample format, for reports.
    pub description: String,
    /// Whether the values are fractions of full scale (WAV) rather than volts (CSV).
    pub full_scale_fractions: bool,
    /// How many samples the file holds, where its header says (WAV); for progress reports.
    pub expected_len: Option<u64>,
    inner: Box<dyn Iterator<Item = Result<f64, RecordingError>> + Send>,
}

impl Iterator for Samples {
    type Item = Result<f64, RecordingError>;
    fn next(&mut self) -> Option<Self::Item> {
        self.inner.next()
    }
}

/// Opens a recording by its extension: `.wav` or `.csv`. `channel` (0-based) picks a WAV
/// channel.
pub fn open(path: &Path, channel: usize, columns: &CsvColumns) -> Result<Samples, RecordingError> {
    match path
        .extension()
        .and_then(|e| e.to_str())
        .map(str::to_ascii_lowercase)
        .as_deref()
    {
        Some("wav") => open_wav(path, channel),
        Some("csv") | Some("txt") => open_csv(path, columns),
        _ => Err(RecordingError::Format {
            path: path.display().to_string(),
            message: "unsupported recording: give a .wav or .csv file".into(),
        }),
    }
}

fn open_wav(path: &Path, channel: usize) -> Result<Samples, RecordingError> {
    let name = path.display().to_string();
    let format_error = |message: String| RecordingError::Format {
        path: name.clone(),
        message,
    };
    let reader = hound::WavReader::open(path)
        .map_err(|e| format_error(format!("not a readable WAV file: {e}")))?;
    let spec = reader.spec();
    let channels = usize::from(spec.channels);
    if channel >= channels {
        return Err(format_error(format!(
            "channel {} asked for, the file has {channels} (channels count from 0)",
            channel
        )));
    }
    let rate = f64::from(spec.sample_rate);
    if rate < MIN_SAMPLE_RATE {
        return Err(format_error(format!(
            "{rate} samples per second is too few to follow the mains (at least {MIN_SAMPLE_RATE})"
        )));
    }
    if reader.len() == 0 {
        return Err(format_error("the recording holds no samples".into()));
    }
    let frames = u64::from(reader.duration());
    let description = format!(
        "WAV, {} Hz, {}-bit {}, {} channel{}",
        spec.sample_rate,
        spec.bits_per_sample,
        match spec.sample_format {
            hound::SampleFormat::Int => "integer",
            hound::SampleFormat::Float => "float",
        },
        channels,
        if channels == 1 { "" } else { "s" }
    );
    let path_name = name.clone();
    let wrap = move |e: hound::Error| RecordingError::Format {
        path: path_name.clone(),
        message: format!("bad or truncated sample data: {e}"),
    };
    let inner: Box<dyn Iterator<Item = Result<f64, RecordingError>> + Send> =
        match (spec.sample_format, spec.bits_per_sample) {
            (hound::SampleFormat::Float, 32) => Box::new(
                reader
                    .into_samples::<f32>()
                    .skip(channel)
                    .step_by(channels)
                    .map(move |s| s.map(f64::from).map_err(&wrap)),
            ),
            (hound::SampleFormat::Int, bits @ (8 | 16 | 24 | 32)) => {
                let scale = f64::from(1u32 << (bits - 1));
                Box::new(
                    reader
                        .into_samples::<i32>()
                        .skip(channel)
                        .step_by(channels)
                        .map(move |s| s.map(|v| f64::from(v) / scale).map_err(&wrap)),
                )
            }
            (format, bits) => {
                return Err(format_error(format!(
                    "unsupported sample format: {bits}-bit {}",
                    if format == hound::SampleFormat::Float {
                        "float"
                    } else {
                        "integer"
                    }
                )))
            }
        };
    let checked_name = name.clone();
    let mut index = 0usize;
    let inner = Box::new(inner.map(move |s| {
        index += 1;
        match s {
            Ok(v) if !v.is_finite() => Err(RecordingError::Format {
                path: checked_name.clone(),
                message: format!("sample {index} is not a finite number"),
            }),
            other => other,
        }
    }));
    Ok(Samples {
        sample_rate: rate,
        description,
        full_scale_fractions: true,
        expected_len: Some(frames),
        inner,
    })
}

/// A CSV recording: a header line naming the columns, then one sample per line. Blank lines
/// and lines starting with `#` are skipped; fields may be quoted and padded; the separator
/// is a comma or a semicolon. The sample rate comes from the first two time stamps; every
/// later interval must agree with it within 1%.
fn open_csv(path: &Path, columns: &CsvColumns) -> Result<Samples, RecordingError> {
    let name = path.display().to_string();
    let io = |e: std::io::Error| RecordingError::Io {
        path: name.clone(),
        message: e.to_string(),
    };
    let file = File::open(path).map_err(io)?;
    let mut lines = BufReader::new(file).lines().enumerate();
    let line_error = |line: usize, message: String| RecordingError::Line {
        path: name.clone(),
        line,
        message,
    };
    // Header.
    let (header_line, header) = loop {
        match lines.next() {
            None => {
                return Err(RecordingError::Format {
                    path: name.clone(),
                    message: "the file is empty".into(),
                })
            }
            Some((k, line)) => {
                let line = line.map_err(io)?;
                let trimmed = line.trim();
                if trimmed.is_empty() || trimmed.starts_with('#') {
                    continue;
                }
                break (k + 1, line);
            }
        }
    };
    let separator = if header.contains(';') && !header.contains(',') {
        ';'
    } else {
        ','
    };
    let clean = |s: &str| s.trim().trim_matches('"').trim().to_string();
    let names: Vec<String> = header.split(separator).map(clean).collect();
    let find = |wanted: &str| names.iter().position(|n| n.eq_ignore_ascii_case(wanted));
    let time_col = find(&columns.time).ok_or_else(|| {
        line_error(
            header_line,
            format!(
                "no column `{}` (columns: {})",
                columns.time,
                names.join(", ")
            ),
        )
    })?;
    let volt_col = find(&columns.voltage).ok_or_else(|| {
        line_error(
            header_line,
            format!(
                "no column `{}` (columns: {})",
                columns.voltage,
                names.join(", ")
            ),
        )
    })?;
    let parse = move |k: usize, line: &str| -> Result<Option<(f64, f64)>, RecordingError> {
        let trimmed = line.trim();
        if trimmed.is_empty() || trimmed.starts_with('#') {
            return Ok(None);
        }
        let fields: Vec<String> = trimmed.split(separator).map(clean).collect();
        let get = |i: usize, what: &str| -> Result<f64, RecordingError> {
            let text = fields.get(i).ok_or_else(|| RecordingError::Line {
                path: String::new(),
                line: k,
                message: format!("missing the {what} field"),
            })?;
            match text.parse::<f64>() {
                Ok(v) if v.is_finite() => Ok(v),
                _ => Err(RecordingError::Line {
                    path: String::new(),
                    line: k,
                    message: format!("{what} `{text}` is not a finite number"),
                }),
            }
        };
        Ok(Some((get(time_col, "time")?, get(volt_col, "voltage")?)))
    };
    // Read the first two samples to learn the rate.
    let mut first = Vec::new();
    let mut rest_lines = lines;
    while first.len() < 2 {
        match rest_lines.next() {
            None => break,
            Some((k, line)) => {
                let line = line.map_err(io)?;
                if let Some(sample) = parse(k + 1, &line).map_err(|e| with_path(e, &name))? {
                    first.push(sample);
                }
            }
        }
    }
    if first.len() < 2 {
        return Err(RecordingError::Format {
            path: name.clone(),
            message: "the recording holds fewer than two samples".into(),
        });
    }
    let dt = first[1].0 - first[0].0;
    if dt <= 0.0 {
        return Err(line_error(
            header_line + 2,
            "time stamps must increase".into(),
        ));
    }
    let rate = 1.0 / dt;
    if rate < MIN_SAMPLE_RATE {
        return Err(RecordingError::Format {
            path: name.clone(),
            message: format!(
                "{rate:.0} samples per second is too few to follow the mains (at least {MIN_SAMPLE_RATE})"
            ),
        });
    }
    let mut last_time = first[1].0;
    let first_values = [first[0].1, first[1].1];
    let stream_name = name.clone();
    let rest = rest_lines.filter_map(move |(k, line)| {
        let line = match line {
            Ok(l) => l,
            Err(e) => {
                return Some(Err(RecordingError::Io {
                    path: stream_name.clone(),
                    message: e.to_string(),
                }))
            }
        };
        match parse(k + 1, &line) {
            Ok(None) => None,
            Err(e) => Some(Err(with_path(e, &stream_name))),
            Ok(Some((t, v))) => {
                let step = t - last_time;
                last_time = t;
                if (step - dt).abs() > 0.01 * dt {
                    Some(Err(RecordingError::Line {
                        path: stream_name.clone(),
                        line: k + 1,
                        message: format!(
                            "time step {step:e} s differs from the recording's {dt:e} s: samples must be evenly spaced"
                        ),
                    }))
                } else {
                    Some(Ok(v))
                }
            }
        }
    });
    Ok(Samples {
        sample_rate: rate,
        description: format!("CSV, {rate:.0} samples per second"),
        full_scale_fractions: false,
        expected_len: None,
        inner: Box::new(first_values.into_iter().map(Ok).chain(rest)),
    })
}

fn with_path(e: RecordingError, path: &str) -> RecordingError {
    match e {
        RecordingError::Line { line, message, .. } => RecordingError::Line {
            path: path.to_string(),
            line,
            message,
        },
        other => other,
    }
}

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
}

impl Scaled {
    /// Every sample in volts.
    pub fn volts(self) -> impl Iterator<Item = Result<f64, RecordingError>> {
        let scale = self.scale;
        self.lead
            .into_iter()
            .map(move |v| Ok(v * scale))
            .chain(self.rest.map(move |s| s.map(|v| v * scale)))
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
        Some(Scale::VoltsPerFullScale(v)) => (v, format!("{v} V per full scale (given)"), None),
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
                    "{:.6} per unit (calibrated: the first whole cycles read {target} V rms)",
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
