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

mod csv_text;
mod scale;
mod wav;
use csv_text::*;
pub use scale::*;
use wav::*;

/// The lowest sample rate accepted, samples per second: 20 samples per 50 Hz cycle.
pub const MIN_SAMPLE_RATE: f64 = 1000.0;

/// The largest sample magnitude accepted, volts: the bound of a declared supply. A sample
/// beyond it is corrupt data, not mains.
pub const MAX_SAMPLE_V: f64 = 1e6;

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
    /// A sample, once scaled, is not finite or lies beyond [`MAX_SAMPLE_V`].
    #[error(
        "{path}: sample {index} (at {time_s:.6} s) reads {volts:e} V, beyond the {MAX_SAMPLE_V:e} V \
         any mains recording holds: a corrupt sample, or a wrong scale"
    )]
    AbsurdSample {
        /// The file.
        path: String,
        /// 0-based index of the sample.
        index: usize,
        /// Its time from the first sample, seconds.
        time_s: f64,
        /// Its value once scaled, volts.
        volts: f64,
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
        Some("csv" | "txt") => open_csv(path, columns),
        _ => Err(RecordingError::Format {
            path: path.display().to_string(),
            message: "unsupported recording: give a .wav or .csv file".into(),
        }),
    }
}

pub(crate) fn with_path(e: RecordingError, path: &str) -> RecordingError {
    match e {
        RecordingError::Line { line, message, .. } => RecordingError::Line {
            path: path.to_string(),
            line,
            message,
        },
        other => other,
    }
}
