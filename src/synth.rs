//! Writing a disturbance profile as a WAV recording, so the same profile can drive a bench
//! amplifier or an arbitrary waveform source.
//!
//! The recording holds `lead_s` of nominal supply, the event, and `tail_s` of nominal supply
//! after it. Samples are volts divided by `volts_per_full_scale` (a full-scale sample is
//! that many volts).

use std::io::{Cursor, Seek, Write};

use crate::profile::Profile;

/// Sample encoding of the WAV file.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum SampleFormat {
    /// 16-bit signed integer.
    Int16,
    /// 24-bit signed integer.
    Int24,
    /// 32-bit IEEE float.
    Float32,
}

/// What to synthesise.
#[derive(Clone, Debug)]
pub struct SynthOptions {
    /// Nominal RMS voltage, volts.
    pub rms_v: f64,
    /// Mains frequency, hertz.
    pub frequency_hz: f64,
    /// Samples per second.
    pub sample_rate: u32,
    /// Nominal supply before the onset, seconds.
    pub lead_s: f64,
    /// Nominal supply after the event's end, seconds.
    pub tail_s: f64,
    /// Volts represented by a full-scale sample.
    pub volts_per_full_scale: f64,
    /// Sample encoding.
    pub format: SampleFormat,
    /// Harmonics added on top: (order, amplitude as a fraction of the fundamental's).
    pub harmonics: Vec<(u32, f64)>,
    /// Peak of the added uniform noise, fraction of the nominal peak.
    pub noise: f64,
}

impl SynthOptions {
    /// The default scale: twice the nominal peak, so swells up to 200% fit.
    pub fn default_full_scale(rms_v: f64) -> f64 {
        2.0 * rms_v * std::f64::consts::SQRT_2
    }
}

/// Errors writing a WAV file.
#[derive(Debug, thiserror::Error)]
pub enum SynthError {
    /// A sample would exceed full scale.
    #[error("the profile reaches {peak_v:.1} V, beyond the {full_scale_v:.1} V full scale: raise the volts per full scale")]
    Clipped {
        /// Largest absolute sample, volts.
        peak_v: f64,
        /// The scale in use, volts.
        full_scale_v: f64,
    },
    /// The WAV encoder failed.
    #[error("WAV encoding: {0}")]
    Wav(#[from] hound::Error),
}

/// The most samples a synthesised recording may hold: 100 million (2.8 hours at 10 kHz;
/// 800 MB while it is built).
pub const MAX_SAMPLES: u64 = 100_000_000;

/// The highest sample rate, samples per second.
pub const MAX_SAMPLE_RATE: u32 = 1_000_000;

/// How many samples `samples` would produce (lead, event and tail), without making them.
pub fn sample_count(profile: &Profile, options: &SynthOptions) -> u64 {
    let period = 1.0 / options.frequency_hz;
    let lead = (options.lead_s / period).round() * period;
    let onset = lead + profile.phase_deg.rem_euclid(360.0) / 360.0 * period;
    let total = onset + profile.envelope(options.frequency_hz).end_s + options.tail_s;
    let count = (total * f64::from(options.sample_rate)).ceil();
    if count.is_finite() && count >= 0.0 {
        count as u64
    } else {
        u64::MAX
    }
}

/// The samples of `profile` as volts, at the options' rate, the onset at `lead_s` (on a
/// rising zero crossing plus the profile's phase angle). Check [`sample_count`] against
/// [`MAX_SAMPLES`] first: they are held in memory.
pub fn samples(profile: &Profile, options: &SynthOptions) -> Vec<f64> {
    let period = 1.0 / options.frequency_hz;
    let lead = (options.lead_s / period).round() * period;
    let onset = lead + profile.phase_deg.rem_euclid(360.0) / 360.0 * period;
    let envelope = profile.envelope(options.frequency_hz);
    let total = onset + envelope.end_s + options.tail_s;
    let count = (total * f64::from(options.sample_rate)).ceil() as usize;
    let amplitude = options.rms_v * std::f64::consts::SQRT_2;
    let w = 2.0 * std::f64::consts::PI * options.frequency_hz;
    // A fixed-seed generator: the same options always give the same file.
    let mut seed: u64 = 0x5a67_7472_6970;
    (0..count)
        .map(|k| {
            let t = k as f64 / f64::from(options.sample_rate);
            let level = envelope.level(t - onset) * amplitude;
            let mut v = level * (w * t).sin();
            for &(order, fraction) in &options.harmonics {
                v += fraction * level * (f64::from(order) * w * t).sin();
            }
            if options.noise > 0.0 {
                seed = seed
                    .wrapping_mul(6_364_136_223_846_793_005)
                    .wrapping_add(1_442_695_040_888_963_407);
                let u = (seed >> 11) as f64 / (1u64 << 53) as f64;
                v += (2.0 * u - 1.0) * options.noise * amplitude;
            }
            v
        })
        .collect()
}

/// Encodes volts as a WAV file into `out`.
pub fn write_wav<W: Write + Seek>(
    volts: &[f64],
    options: &SynthOptions,
    out: W,
) -> Result<(), SynthError> {
    let peak_v = volts.iter().fold(0.0_f64, |m, v| m.max(v.abs()));
    if peak_v > options.volts_per_full_scale {
        return Err(SynthError::Clipped {
            peak_v,
            full_scale_v: options.volts_per_full_scale,
        });
    }
    let (bits, sample_format) = match options.format {
        SampleFormat::Int16 => (16, hound::SampleFormat::Int),
        SampleFormat::Int24 => (24, hound::SampleFormat::Int),
        SampleFormat::Float32 => (32, hound::SampleFormat::Float),
    };
    let spec = hound::WavSpec {
        channels: 1,
        sample_rate: options.sample_rate,
        bits_per_sample: bits,
        sample_format,
    };
    let mut writer = hound::WavWriter::new(out, spec)?;
    let scale = options.volts_per_full_scale;
    match options.format {
        SampleFormat::Int16 => {
            for v in volts {
                writer.write_sample((v / scale * 32767.0).round() as i16)?;
            }
        }
        SampleFormat::Int24 => {
            for v in volts {
                writer.write_sample((v / scale * 8_388_607.0).round() as i32)?;
            }
        }
        SampleFormat::Float32 => {
            for v in volts {
                writer.write_sample((v / scale) as f32)?;
            }
        }
    }
    writer.finalize()?;
    Ok(())
}

/// Encodes volts as WAV bytes.
pub fn wav_bytes(volts: &[f64], options: &SynthOptions) -> Result<Vec<u8>, SynthError> {
    let mut cursor = Cursor::new(Vec::new());
    write_wav(volts, options, &mut cursor)?;
    Ok(cursor.into_inner())
}
