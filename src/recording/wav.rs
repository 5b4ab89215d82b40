//! WAV recordings: PCM and float samples of one channel, as fractions of full scale.

use super::*;

pub(crate) fn open_wav(path: &Path, channel: usize) -> Result<Samples, RecordingError> {
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
            "channel {channel} asked for, the file has {channels} (channels count from 0)"
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
