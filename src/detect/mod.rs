//! Finding dips, swells and interruptions in a recorded waveform by the IEC 61000-4-30
//! method, one half cycle at a time, with bounded memory.
//!
//! - **Urms(1/2)**: the RMS over one fundamental cycle, the window starting at a fundamental
//!   zero crossing and refreshed every half cycle. Each value is time-stamped at the end of
//!   its window. Zero crossings are sought near where the last period predicts them; where
//!   there are none (an interruption) the predicted instant is used.
//! - A **dip** starts when Urms(1/2) falls below the dip threshold and ends when it is at or
//!   above the threshold plus the hysteresis; its residual voltage is the lowest Urms(1/2)
//!   during it. An event whose residual falls below the interruption threshold is reported
//!   as an **interruption**. A **swell** starts above the swell threshold and ends at or below
//!   the threshold minus the hysteresis; its magnitude is the highest Urms(1/2).
//! - Each cycle also gives a frequency (from successive rising zero crossings) and the
//!   fundamental's phasor (a one-cycle DFT against the declared frequency); an event whose
//!   first whole cycle has a phasor angle differing from the last whole cycle before it by
//!   more than `phase_jump_deg` (after the drift the frequency explains) is flagged.

use num_complex::Complex64;
use serde::Serialize;
use std::collections::VecDeque;

mod classes;
mod detector;
mod frequency;
mod report;
pub use classes::*;
pub use detector::*;
pub use frequency::*;
pub use report::*;

/// The resolution at which Urms(1/2) is reported and judged, percent of the declared
/// voltage: every threshold test and every class is taken on the value as reported (a dip
/// reported at 40.00% is EN 50160 row C, never D because its unrounded value was 39.9999%).
pub const LEVEL_RESOLUTION_PCT: f64 = 0.01;

/// `percent` rounded to [`LEVEL_RESOLUTION_PCT`].
pub fn reported_level(percent: f64) -> f64 {
    // Dividing the whole number of steps (rather than multiplying by 0.01) gives the double
    // nearest the decimal value, so 40.00 compares equal to the literal 40.0.
    let per_pct = LEVEL_RESOLUTION_PCT.recip().round();
    (percent * per_pct).round() / per_pct
}

/// Detection thresholds, percent of the declared voltage.
#[derive(Clone, Debug, PartialEq)]
pub struct Thresholds {
    /// Dip threshold. Default 90% (IEC 61000-4-30 typical).
    pub dip_pct: f64,
    /// Swell threshold. Default 110%.
    pub swell_pct: f64,
    /// Interruption threshold. Default 10%.
    pub interruption_pct: f64,
    /// Hysteresis. Default 2%.
    pub hysteresis_pct: f64,
    /// Smallest phase change flagged as a jump, degrees. Default 10.
    pub phase_jump_deg: f64,
}

impl Default for Thresholds {
    fn default() -> Self {
        Self {
            dip_pct: 90.0,
            swell_pct: 110.0,
            interruption_pct: 10.0,
            hysteresis_pct: 2.0,
            phase_jump_deg: 10.0,
        }
    }
}

/// The kind of a detected supply disturbance (not to be confused with the engine's discrete
/// [`crate::engine::EventKind`]: a relay's pick-up, a switch's change).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum DisturbanceKind {
    /// Urms(1/2) below the dip threshold.
    Dip,
    /// A dip whose residual fell below the interruption threshold.
    Interruption,
    /// Urms(1/2) above the swell threshold.
    Swell,
}

impl DisturbanceKind {
    /// The name reports use (the same as in JSON): `dip`, `interruption` or `swell`.
    pub fn name(self) -> &'static str {
        match self {
            DisturbanceKind::Dip => "dip",
            DisturbanceKind::Interruption => "interruption",
            DisturbanceKind::Swell => "swell",
        }
    }
}

/// A detected event.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Event {
    /// Kind.
    pub kind: DisturbanceKind,
    /// Start: the end of the first Urms(1/2) window past the threshold, seconds.
    pub start_s: f64,
    /// From start to the end of the first window back past the threshold and hysteresis.
    pub duration_s: f64,
    /// Residual voltage (dips, interruptions) or magnitude (swells): the extreme Urms(1/2),
    /// percent of the declared voltage.
    pub level_pct: f64,
    /// IEEE 1159 category.
    pub ieee_1159: String,
    /// EN 50160 table cell (`A1` .. `X5` for dips, `S1` .. `T3` for swells), or a note.
    pub en_50160: String,
    /// Point-on-wave start: the first instant the waveform departs from the cycle before
    /// it (see [`Detector`]), seconds; `None` when no clean departure was found (a noisy
    /// or already disturbed waveform, a slow ramp).
    pub wave_start_s: Option<f64>,
    /// Point-on-wave end: the instant the waveform is back to the pre-event cycle (short
    /// events) or departs from the event's own steady cycles (long ones), seconds.
    pub wave_end_s: Option<f64>,
    /// Phase jump at onset, degrees, when one above the threshold was seen.
    pub phase_jump_deg: Option<f64>,
    /// Whether the recording ended during the event.
    pub open_at_end: bool,
}

/// One Urms(1/2) value.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct HalfCycle {
    /// End of the window, seconds.
    pub time_s: f64,
    /// RMS over the window, volts.
    pub rms_v: f64,
}

/// One cycle's frequency and fundamental phasor.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct Cycle {
    /// Start of the cycle (a rising zero crossing), seconds.
    pub start_s: f64,
    /// Frequency from this and the next rising zero crossing, hertz.
    pub frequency_hz: f64,
    /// RMS of the fundamental, volts.
    pub fundamental_rms_v: f64,
    /// Angle of the fundamental against a sine of the declared frequency at t = 0, degrees.
    pub angle_deg: f64,
}

/// What a detection found.
#[derive(Clone, Debug, Default, Serialize)]
pub struct Detection {
    /// Events in time order.
    pub events: Vec<Event>,
    /// Every Urms(1/2) value.
    pub half_cycles: Vec<HalfCycle>,
    /// Every whole cycle with zero crossings at both ends.
    pub cycles: Vec<Cycle>,
    /// Samples read.
    pub samples: u64,
    /// Duration of the recording, seconds.
    pub duration_s: f64,
}

/// A recording with no mains in it: not one whole cycle of a supply (all zero, or DC).
#[derive(Clone, Debug, PartialEq, thiserror::Error)]
#[error(
    "no mains in the recording: its {duration_s:.3} s hold not one whole cycle (two rising \
     zero crossings a cycle apart); is it all zero, or DC?"
)]
pub struct NoMains {
    /// The recording's duration, seconds.
    pub duration_s: f64,
}

impl Detection {
    /// Refuses a recording that holds no mains at all: no whole cycle anywhere.
    pub fn check_mains(&self) -> Result<(), NoMains> {
        if self.cycles.is_empty() {
            Err(NoMains {
                duration_s: self.duration_s,
            })
        } else {
            Ok(())
        }
    }
}

/// Detects events in a whole signal held in memory (tests and small recordings).
pub fn detect(
    samples: &[f64],
    sample_rate: f64,
    declared_v: f64,
    frequency_hz: f64,
    thresholds: Thresholds,
) -> Detection {
    let mut d = Detector::new(sample_rate, declared_v, frequency_hz, thresholds);
    for &v in samples {
        d.push(v);
    }
    d.finish()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn kind_names_match_the_json() {
        for k in [
            DisturbanceKind::Dip,
            DisturbanceKind::Interruption,
            DisturbanceKind::Swell,
        ] {
            assert_eq!(serde_json::to_value(k).unwrap(), k.name());
        }
    }

    #[test]
    fn en_50160_cells() {
        // EN 50160:2010 dip table (published).
        assert_eq!(en_50160(DisturbanceKind::Dip, 0.1, 85.0), "A1");
        assert_eq!(en_50160(DisturbanceKind::Dip, 0.3, 75.0), "B2");
        assert_eq!(en_50160(DisturbanceKind::Dip, 0.7, 50.0), "C3");
        assert_eq!(en_50160(DisturbanceKind::Dip, 2.0, 20.0), "D4");
        assert_eq!(en_50160(DisturbanceKind::Interruption, 10.0, 1.0), "X5");
        assert_eq!(en_50160(DisturbanceKind::Swell, 0.2, 125.0), "S1");
        assert_eq!(en_50160(DisturbanceKind::Swell, 3.0, 115.0), "T2");
    }

    #[test]
    fn ieee_1159_categories() {
        // IEEE 1159-2009 Table 2 (published).
        assert_eq!(
            ieee_1159(DisturbanceKind::Dip, 0.2, 40.0, 50.0),
            "instantaneous sag"
        );
        assert_eq!(
            ieee_1159(DisturbanceKind::Dip, 1.0, 40.0, 50.0),
            "momentary sag"
        );
        assert_eq!(
            ieee_1159(DisturbanceKind::Dip, 10.0, 40.0, 50.0),
            "temporary sag"
        );
        assert_eq!(
            ieee_1159(DisturbanceKind::Interruption, 1.0, 2.0, 50.0),
            "momentary interruption"
        );
        assert_eq!(
            ieee_1159(DisturbanceKind::Interruption, 10.0, 2.0, 50.0),
            "temporary interruption"
        );
        assert_eq!(
            ieee_1159(DisturbanceKind::Swell, 0.2, 130.0, 50.0),
            "instantaneous swell"
        );
        assert!(ieee_1159(DisturbanceKind::Swell, 1.0, 150.0, 50.0).contains("outside"));
    }
}
