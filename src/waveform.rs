//! Time functions that drive independent sources: constant, sine and step.
//!
//! A waveform knows its value at any instant and the instants where it changes abruptly
//! (breakpoints), which the transient engine must land on exactly.

use std::f64::consts::PI;

use crate::profile::Envelope;

/// A source's value over time. Values are volts for voltage sources, amperes for current
/// sources.
#[derive(Clone, Debug, PartialEq)]
pub enum Waveform {
    /// A constant value.
    Constant(f64),
    /// `offset + amplitude * sin(2 pi frequency t + phase)`.
    Sine {
        /// Peak value (not RMS).
        amplitude: f64,
        /// Frequency in hertz.
        frequency_hz: f64,
        /// Phase at t = 0, in degrees.
        phase_deg: f64,
        /// Constant added to the sine.
        offset: f64,
    },
    /// A mains sine whose RMS level follows a disturbance envelope:
    /// `level(t - onset_s) amplitude sin(2 pi frequency t + phase)`.
    Disturbed {
        /// Nominal peak value.
        amplitude: f64,
        /// Frequency in hertz.
        frequency_hz: f64,
        /// Phase at t = 0, in degrees.
        phase_deg: f64,
        /// Time of the first event's onset, seconds.
        onset_s: f64,
        /// The level over time since onset.
        envelope: Envelope,
    },
    /// Recorded samples, evenly spaced, linearly interpolated; the first value holds
    /// before them and the last after them.
    Samples {
        /// Time of the first sample, seconds.
        start_s: f64,
        /// Time between samples, seconds.
        interval_s: f64,
        /// The values.
        values: std::sync::Arc<[f64]>,
    },
    /// `before` until `at_s`, then `after`: an ideal step with a breakpoint at `at_s`.
    Step {
        /// Value before the step.
        before: f64,
        /// Value from the step on.
        after: f64,
        /// Instant of the step, seconds.
        at_s: f64,
    },
}

impl Waveform {
    /// The value at time `t` (seconds).
    ///
    /// ```
    /// use sagtrip::waveform::Waveform;
    /// let w = Waveform::Sine { amplitude: 2.0, frequency_hz: 50.0, phase_deg: 90.0, offset: 0.0 };
    /// assert!((w.value(0.0) - 2.0).abs() < 1e-12);
    /// ```
    pub fn value(&self, t: f64) -> f64 {
        match *self {
            Waveform::Constant(v) => v,
            Waveform::Sine {
                amplitude,
                frequency_hz,
                phase_deg,
                offset,
            } => offset + amplitude * (2.0 * PI * frequency_hz * t + phase_deg.to_radians()).sin(),
            Waveform::Disturbed {
                amplitude,
                frequency_hz,
                phase_deg,
                onset_s,
                ref envelope,
            } => {
                envelope.level(t - onset_s)
                    * amplitude
                    * (2.0 * PI * frequency_hz * t + phase_deg.to_radians()).sin()
            }
            Waveform::Samples {
                start_s,
                interval_s,
                ref values,
            } => {
                let x = (t - start_s) / interval_s;
                if x <= 0.0 || values.len() < 2 {
                    return values.first().copied().unwrap_or(0.0);
                }
                let k = x.floor() as usize;
                if k + 1 >= values.len() {
                    return values[values.len() - 1];
                }
                let w = x - k as f64;
                values[k] * (1.0 - w) + values[k + 1] * w
            }
            Waveform::Step {
                before,
                after,
                at_s,
            } => {
                if t < at_s {
                    before
                } else {
                    after
                }
            }
        }
    }

    /// The left limit of the value at `t`: what a step ending exactly at a breakpoint sees.
    pub fn value_before(&self, t: f64) -> f64 {
        match *self {
            Waveform::Step { before, at_s, .. } if t <= at_s => before,
            _ => self.value(t),
        }
    }

    /// The value at `t`, or its left limit when `left` is set.
    pub fn value_from(&self, t: f64, left: bool) -> f64 {
        if left {
            self.value_before(t)
        } else {
            self.value(t)
        }
    }

    /// The first instant strictly after `t` where the waveform is not smooth, or infinity.
    pub fn next_breakpoint(&self, t: f64) -> f64 {
        match *self {
            Waveform::Step { at_s, .. } if at_s > t => at_s,
            Waveform::Disturbed {
                onset_s,
                ref envelope,
                ..
            } => {
                let since = t - onset_s;
                let points = &envelope.points;
                let k = points.partition_point(|&(time, _)| time <= since);
                points
                    .get(k)
                    .map_or(f64::INFINITY, |&(time, _)| onset_s + time)
            }
            _ => f64::INFINITY,
        }
    }

    /// The fundamental frequency of a periodic waveform, if it has one.
    pub fn frequency_hz(&self) -> Option<f64> {
        match *self {
            Waveform::Sine { frequency_hz, .. } | Waveform::Disturbed { frequency_hz, .. } => {
                Some(frequency_hz)
            }
            _ => None,
        }
    }
}

impl std::fmt::Display for Waveform {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match *self {
            Waveform::Constant(v) => write!(f, "constant {v}"),
            Waveform::Sine {
                amplitude,
                frequency_hz,
                phase_deg,
                offset,
            } => {
                write!(
                    f,
                    "sine {:.4} peak ({:.4} rms), {frequency_hz} Hz",
                    amplitude,
                    amplitude / std::f64::consts::SQRT_2
                )?;
                if phase_deg != 0.0 {
                    write!(f, ", phase {phase_deg} deg")?;
                }
                if offset != 0.0 {
                    write!(f, ", offset {offset}")?;
                }
                Ok(())
            }
            Waveform::Step {
                before,
                after,
                at_s,
            } => {
                write!(f, "step {before} to {after} at {at_s} s")
            }
            Waveform::Samples {
                start_s,
                interval_s,
                ref values,
            } => write!(
                f,
                "{} recorded samples every {interval_s} s from {start_s} s",
                values.len()
            ),
            Waveform::Disturbed {
                amplitude,
                frequency_hz,
                onset_s,
                ..
            } => write!(
                f,
                "disturbed sine {:.4} rms nominal, {frequency_hz} Hz, onset at {onset_s} s",
                amplitude / std::f64::consts::SQRT_2
            ),
        }
    }
}
