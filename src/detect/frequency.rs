//! The supply frequency over 10 s intervals, of the first cycles, and the nearest standard voltage.

use super::*;

impl Detection {
    /// The supply frequency over each 10 s interval of the recording (IEC 61000-4-30: the
    /// whole cycles counted in the interval divided by their total duration), hertz. Cycles
    /// that overlap an event, or lie within one cycle of it, do not count: an event
    /// distorts the zero crossings that time them. A recording shorter than 10 s is one
    /// interval; an interval with no undisturbed cycle gives no value.
    pub fn frequency_intervals(&self) -> Vec<f64> {
        const INTERVAL_S: f64 = 10.0;
        let mut intervals: Vec<(f64, f64)> = Vec::new();
        for c in &self.cycles {
            let period = 1.0 / c.frequency_hz;
            let (from, to) = (c.start_s - period, c.start_s + 2.0 * period);
            let disturbed = self.events.iter().any(|e| {
                let end = e.start_s + e.duration_s;
                // An event's time stamp lies up to one window after its onset.
                from < end && to > e.start_s - period
            });
            if disturbed {
                continue;
            }
            let k = (c.start_s / INTERVAL_S).floor() as usize;
            if intervals.len() <= k {
                intervals.resize(k + 1, (0.0, 0.0));
            }
            intervals[k].0 += 1.0;
            intervals[k].1 += period;
        }
        intervals
            .into_iter()
            .filter(|(n, _)| *n > 0.0)
            .map(|(n, time)| n / time)
            .collect()
    }
}

/// The frequency of whole cycles (rising zero crossing to rising zero crossing, located
/// between samples) in `samples` taken at `rate` per second, hertz; `None` with fewer
/// than two rising crossings.
pub fn measured_frequency(samples: &[f64], rate: f64) -> Option<f64> {
    let rising: Vec<f64> = (1..samples.len())
        .filter(|&i| samples[i - 1] < 0.0 && samples[i] >= 0.0)
        .map(|i| (i - 1) as f64 + samples[i - 1] / (samples[i - 1] - samples[i]))
        .collect();
    match rising.as_slice() {
        [first, .., last] => Some(rate * (rising.len() - 1) as f64 / (last - first)),
        _ => None,
    }
}

/// The standard nominal voltage (IEC 60038 and common national values: 100, 110, 115,
/// 120, 127, 200, 220, 230, 240, 277 V) nearest a measured RMS voltage, volts.
pub fn nearest_standard_voltage(rms_v: f64) -> f64 {
    [
        100.0, 110.0, 115.0, 120.0, 127.0, 200.0, 220.0, 230.0, 240.0, 277.0,
    ]
    .into_iter()
    .min_by(|a: &f64, b: &f64| (a - rms_v).abs().total_cmp(&(b - rms_v).abs()))
    .unwrap_or(230.0)
}
