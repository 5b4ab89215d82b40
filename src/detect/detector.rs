//! The streaming IEC 61000-4-30 detector: Urms(1/2), events, point-on-wave start and end, cycles.

use super::*;

/// The first sample at or after the fractional sample position `x`. A crossing that falls
/// on a sample, give or take rounding, is that sample: otherwise a window between two such
/// crossings could hold one sample too few or too many (0.25% off at 200 samples a cycle).
fn first_sample_at(x: f64) -> u64 {
    (x - 1e-6).ceil().max(0.0) as u64
}

/// An event being followed.
struct Open {
    kind: DisturbanceKind,
    start_s: f64,
    extreme: f64,
    /// Point-on-wave start (sample position) and the departure levels it was found with.
    wave: Option<WaveStart>,
}

/// A point-on-wave start and what is needed to find the matching end.
struct WaveStart {
    /// Sample position of the start.
    at: f64,
    /// Departure that marks a change, and the quiet level walked back (or on) to, volts.
    trigger: f64,
    floor: f64,
    /// The cycle before the start (samples from index `reference_first`).
    reference: Vec<f64>,
    reference_first: u64,
}

/// A departure that marks a change of waveform: 3% of the declared peak (our own choice,
/// well below the 10% change of the shallowest dip or swell the thresholds detect), or four
/// times the quiet cycle's departure.
const WAVE_TRIGGER: f64 = 0.03;

/// The level the start is walked back to: 0.2% of the declared peak, or twice the quiet
/// cycle's departure.
const WAVE_FLOOR: f64 = 0.002;

/// Streaming detector: feed samples in volts, then call [`Detector::finish`].
pub struct Detector {
    rate: f64,
    declared_v: f64,
    frequency_hz: f64,
    thresholds: Thresholds,
    /// Recent samples and their running sum of squares, with the index of the first.
    samples: VecDeque<f64>,
    /// Running sum of squares up to and including each kept sample.
    squares: VecDeque<f64>,
    /// The running sum before the first kept sample.
    base: f64,
    first_index: u64,
    count: u64,
    /// Half-cycle boundaries found so far (sample index as a real number), last two.
    boundaries: VecDeque<f64>,
    /// Whether the last boundary was a rising crossing.
    last_rising: bool,
    /// Present estimate of the half period, samples.
    half_period: f64,
    last_rising_at: Option<f64>,
    open: Option<Open>,
    result: Detection,
}

impl Detector {
    /// A detector for a recording at `sample_rate` of a supply declared at `declared_v` rms
    /// and `frequency_hz`.
    pub fn new(
        sample_rate: f64,
        declared_v: f64,
        frequency_hz: f64,
        thresholds: Thresholds,
    ) -> Self {
        Self {
            rate: sample_rate,
            declared_v,
            frequency_hz,
            thresholds,
            samples: VecDeque::new(),
            squares: VecDeque::new(),
            base: 0.0,
            first_index: 0,
            count: 0,
            boundaries: VecDeque::new(),
            last_rising: false,
            half_period: sample_rate / frequency_hz / 2.0,
            last_rising_at: None,
            open: None,
            result: Detection::default(),
        }
    }

    fn sample(&self, index: u64) -> f64 {
        self.samples[(index - self.first_index) as usize]
    }

    /// Sum of squares of samples with index in [a, b).
    fn sum_squares(&self, a: u64, b: u64) -> f64 {
        let at = |i: u64| -> f64 {
            if i == self.first_index {
                self.base
            } else {
                self.squares[(i - 1 - self.first_index) as usize]
            }
        };
        at(b) - at(a)
    }

    /// Feeds one sample, volts.
    pub fn push(&mut self, v: f64) {
        let previous = self.squares.back().copied().unwrap_or(0.0);
        self.samples.push_back(v);
        self.squares.push_back(previous + v * v);
        self.count += 1;
        // Look for the next boundary once enough samples past its predicted place are in.
        if self.boundaries.is_empty() {
            self.find_first_crossing();
        } else {
            let last = *self.boundaries.back().unwrap_or(&0.0);
            let predicted = last + self.half_period;
            if (self.count as f64) > predicted + 0.25 * self.half_period + 1.0 {
                self.next_boundary(predicted);
            }
        }
        // Keep about four cycles of samples (the point-on-wave search looks back 2.75).
        let keep = (8.0 * self.half_period) as u64 + 8;
        let oldest_needed = self
            .boundaries
            .front()
            .map_or(self.count.saturating_sub(keep), |b| {
                (*b as u64).saturating_sub(2)
            });
        while self.first_index + 1 < oldest_needed.min(self.count.saturating_sub(keep)) {
            self.samples.pop_front();
            self.base = self.squares.pop_front().unwrap_or(self.base);
            self.first_index += 1;
        }
    }

    /// The first rising zero crossing in the data. A recording that starts without one
    /// (an outage, or a supply that has not come on) is timed from its first sample at the
    /// declared frequency after one and a half cycles without a crossing, so that the outage
    /// is measured like any other (IEC 61000-4-30 measures Urms(1/2) at the nominal rate
    /// where no zero crossing is found; from memory).
    fn find_first_crossing(&mut self) {
        let n = self.count;
        if n < 2 {
            return;
        }
        if n as f64 > 3.0 * self.half_period {
            self.boundaries.push_back(0.0);
            self.last_rising = true;
            return;
        }
        let (a, b) = (self.sample(n - 2), self.sample(n - 1));
        if a < 0.0 && b >= 0.0 {
            let x = (n - 2) as f64 + a / (a - b);
            self.boundaries.push_back(x);
            self.last_rising = true;
            self.last_rising_at = Some(x);
        }
    }

    /// Places the boundary after the last one: the zero crossing of the expected direction
    /// nearest `predicted` (within a quarter of a half period), or `predicted` itself.
    fn next_boundary(&mut self, predicted: f64) {
        let rising = !self.last_rising;
        let window = 0.25 * self.half_period;
        let lo = (predicted - window)
            .floor()
            .max(self.first_index as f64 + 1.0) as u64;
        let hi = ((predicted + window).ceil() as u64).min(self.count - 1);
        let mut best: Option<f64> = None;
        for i in lo..=hi {
            let (a, b) = (self.sample(i - 1), self.sample(i));
            let crosses = if rising {
                a < 0.0 && b >= 0.0
            } else {
                a > 0.0 && b <= 0.0
            };
            if crosses {
                let x = (i - 1) as f64 + a / (a - b);
                if best.is_none_or(|y| (x - predicted).abs() < (y - predicted).abs()) {
                    best = Some(x);
                }
            }
        }
        let boundary = best.unwrap_or(predicted);
        let last = *self.boundaries.back().unwrap_or(&boundary);
        if best.is_some() {
            // Follow the measured half period slowly (noise on one crossing should not
            // throw the prediction).
            let measured = boundary - last;
            if measured > 0.5 * self.half_period && measured < 1.5 * self.half_period {
                self.half_period += 0.2 * (measured - self.half_period);
            }
        }
        self.boundaries.push_back(boundary);
        self.last_rising = rising;
        if self.boundaries.len() > 3 {
            self.boundaries.pop_front();
        }
        if self.boundaries.len() >= 3 {
            let (start, end) = (self.boundaries[0], self.boundaries[2]);
            self.half_cycle_value(start, end);
            if rising && best.is_some() {
                if let Some(previous) = self.last_rising_at {
                    self.cycle(previous, boundary);
                }
            }
        }
        if rising && best.is_some() {
            self.last_rising_at = Some(boundary);
        } else if rising {
            self.last_rising_at = None;
        }
    }

    fn half_cycle_value(&mut self, start: f64, end: f64) {
        let (a, b) = (first_sample_at(start), first_sample_at(end));
        if b <= a || a < self.first_index {
            return;
        }
        let rms = (self.sum_squares(a, b) / (b - a) as f64).sqrt();
        let time_s = end / self.rate;
        self.result
            .half_cycles
            .push(HalfCycle { time_s, rms_v: rms });
        self.follow(time_s, reported_level(100.0 * rms / self.declared_v));
    }

    /// One whole cycle between rising crossings at sample positions `a` and `b`.
    fn cycle(&mut self, a: f64, b: f64) {
        let (i0, i1) = (first_sample_at(a), first_sample_at(b));
        if i1 <= i0 || i0 < self.first_index {
            return;
        }
        let w = 2.0 * std::f64::consts::PI * self.frequency_hz / self.rate;
        let mut sum = Complex64::new(0.0, 0.0);
        for i in i0..i1 {
            sum += self.sample(i) * Complex64::from_polar(1.0, -w * i as f64);
        }
        let n = (i1 - i0) as f64;
        let phasor = sum * (2.0 / n);
        self.result.cycles.push(Cycle {
            start_s: a / self.rate,
            frequency_hz: self.rate / (b - a),
            fundamental_rms_v: phasor.norm() / std::f64::consts::SQRT_2,
            angle_deg: phasor.arg().to_degrees(),
        });
    }

    /// The kept sample at real position `x`, linearly interpolated.
    fn at(&self, x: f64) -> Option<f64> {
        let i = x.floor();
        if i < self.first_index as f64 || i + 1.0 >= self.count as f64 {
            return None;
        }
        let i = i as u64;
        let f = x - i as f64;
        Some(self.sample(i) * (1.0 - f) + self.sample(i + 1) * f)
    }

    /// The departure of sample `i` from the sample one cycle before it, volts.
    fn departure(&self, i: u64) -> Option<f64> {
        if i < self.first_index || i >= self.count {
            return None;
        }
        Some(self.sample(i) - self.at(i as f64 - 2.0 * self.half_period)?)
    }

    /// The point-on-wave start of an event whose first Urms(1/2) window past the threshold
    /// ends at sample position `stamp`. The start lies within that one-cycle window: the
    /// first sample there whose departure from the cycle before exceeds the trigger, walked
    /// back to where the departure falls to the floor (interpolated between samples).
    fn wave_start(&self, stamp: f64) -> Option<WaveStart> {
        let n = 2.0 * self.half_period;
        let peak = self.declared_v * std::f64::consts::SQRT_2;
        let (at, trigger, floor) =
            self.first_departure(stamp, WAVE_TRIGGER * peak, WAVE_FLOOR * peak)?;
        let reference_first = (at - n).floor() as u64 - 1;
        let reference = (reference_first..=at.ceil() as u64 + 1)
            .map(|i| self.at(i as f64))
            .collect::<Option<Vec<f64>>>()?;
        Some(WaveStart {
            at,
            trigger,
            floor,
            reference,
            reference_first,
        })
    }

    /// The point-on-wave end of the event that started at `wave` and whose first
    /// Urms(1/2) window back past the threshold and hysteresis ends at `stamp`. A short
    /// event (under three cycles from its start) ends where the waveform is back to the
    /// cycle before the start, repeated: the last sample that departs from it by more than
    /// the trigger, walked on to the floor. A longer one ends where the waveform first
    /// departs from its own previous cycle in the last window, walked back to the floor.
    fn wave_end(&self, wave: &WaveStart, stamp: f64) -> Option<f64> {
        let n = 2.0 * self.half_period;
        let hi = (stamp.floor() as u64).min(self.count.checked_sub(1)?);
        if stamp - wave.at < 3.0 * n {
            let reference = |x: f64| -> Option<f64> {
                let k = ((x - wave.at) / n).ceil().max(0.0);
                let y = x - k * n - wave.reference_first as f64;
                let i = y.floor();
                let r = &wave.reference;
                if i < 0.0 || i as usize + 1 >= r.len() {
                    return None;
                }
                let f = y - i;
                Some(r[i as usize] * (1.0 - f) + r[i as usize + 1] * f)
            };
            let error = |i: u64| Some((self.sample(i) - reference(i as f64)?).abs());
            let from = wave.at.ceil() as u64;
            if from < self.first_index || from > hi {
                return None;
            }
            let mut last = None;
            for i in from..=hi {
                if error(i)? > wave.trigger {
                    last = Some(i);
                }
            }
            let mut j = last?;
            while j < hi && error(j + 1)? > wave.floor {
                j += 1;
            }
            if j == hi {
                return None;
            }
            let (a, b) = (error(j)?, error(j + 1)?);
            return Some(j as f64 + ((a - wave.floor) / (a - b)).clamp(0.0, 1.0));
        }
        self.first_departure(stamp, wave.trigger, wave.floor)
            .map(|(at, _, _)| at)
    }

    /// The first change of waveform in the one-cycle window before sample position
    /// `stamp`: the first sample there whose departure from the cycle before exceeds the
    /// trigger, walked back to where the departure falls to the floor (interpolated between
    /// samples). The trigger and floor are at least `min_trigger` and `min_floor`, and four
    /// and two times the largest departure in the half cycle before the window (its noise).
    /// Returns the position, the trigger and the floor.
    fn first_departure(
        &self,
        stamp: f64,
        min_trigger: f64,
        min_floor: f64,
    ) -> Option<(f64, f64, f64)> {
        let n = 2.0 * self.half_period;
        let lo = (stamp - 1.25 * n).ceil().max(0.0) as u64;
        let hi = (stamp.floor() as u64).min(self.count.checked_sub(1)?);
        let quiet_from = (stamp - 1.75 * n).ceil().max(0.0) as u64;
        let quiet =
            (quiet_from..lo).try_fold(0.0_f64, |m, i| Some(m.max(self.departure(i)?.abs())))?;
        let trigger = min_trigger.max(4.0 * quiet);
        let floor = min_floor.max(2.0 * quiet);
        let first = (lo..=hi).find(|&i| self.departure(i).is_some_and(|d| d.abs() > trigger))?;
        let mut j = first;
        while j > quiet_from && self.departure(j - 1)?.abs() > floor {
            j -= 1;
        }
        let (a, b) = (self.departure(j - 1)?.abs(), self.departure(j)?.abs());
        let at = (j - 1) as f64 + ((floor - a) / (b - a)).clamp(0.0, 1.0);
        Some((at, trigger, floor))
    }

    /// The event state machine on one Urms(1/2) value (percent).
    fn follow(&mut self, time_s: f64, u: f64) {
        let t = &self.thresholds;
        match &mut self.open {
            None => {
                let kind = if u < t.dip_pct {
                    DisturbanceKind::Dip
                } else if u > t.swell_pct {
                    DisturbanceKind::Swell
                } else {
                    return;
                };
                let wave = self.wave_start(time_s * self.rate);
                self.open = Some(Open {
                    kind,
                    start_s: time_s,
                    extreme: u,
                    wave,
                });
            }
            Some(open) => {
                let ended = match open.kind {
                    DisturbanceKind::Swell => {
                        open.extreme = open.extreme.max(u);
                        u <= t.swell_pct - t.hysteresis_pct
                    }
                    _ => {
                        open.extreme = open.extreme.min(u);
                        u >= t.dip_pct + t.hysteresis_pct
                    }
                };
                if ended {
                    self.close(time_s, false);
                }
            }
        }
    }

    fn close(&mut self, end_s: f64, open_at_end: bool) {
        let Some(open) = self.open.take() else {
            return;
        };
        let kind = if open.kind == DisturbanceKind::Dip
            && open.extreme < self.thresholds.interruption_pct
        {
            DisturbanceKind::Interruption
        } else {
            open.kind
        };
        let duration_s = end_s - open.start_s;
        let wave_end = match (&open.wave, open_at_end) {
            (Some(w), false) => self.wave_end(w, end_s * self.rate),
            _ => None,
        };
        self.result.events.push(Event {
            kind,
            start_s: open.start_s,
            wave_start_s: open.wave.as_ref().map(|w| w.at / self.rate),
            wave_end_s: wave_end.map(|x| x / self.rate),
            duration_s,
            level_pct: open.extreme,
            ieee_1159: ieee_1159(kind, duration_s, open.extreme, self.frequency_hz),
            en_50160: en_50160(kind, duration_s, open.extreme),
            phase_jump_deg: None,
            open_at_end,
        });
    }

    /// Ends the recording: closes an open event and flags phase jumps.
    pub fn finish(mut self) -> Detection {
        let end = self.count as f64 / self.rate;
        self.close(end, true);
        self.result.samples = self.count;
        self.result.duration_s = end;
        // Phase jumps: compare the last whole cycle ending before the start with the first
        // whole cycle starting after it; remove the drift the measured frequency explains.
        let threshold = self.thresholds.phase_jump_deg;
        let f0 = self.frequency_hz;
        let half_window = 0.5 / f0;
        for e in &mut self.result.events {
            // The event's onset lies about half a window before its time stamp.
            let onset = e.start_s - half_window;
            let before = self
                .result
                .cycles
                .iter()
                .rev()
                .find(|c| c.start_s + 1.0 / c.frequency_hz <= onset);
            let after = self.result.cycles.iter().find(|c| c.start_s >= onset);
            if let (Some(b), Some(a)) = (before, after) {
                let drift = 360.0 * (b.frequency_hz - f0) * (a.start_s - b.start_s);
                let mut jump = a.angle_deg - b.angle_deg - drift;
                jump = (jump + 180.0).rem_euclid(360.0) - 180.0;
                if jump.abs() >= threshold && a.fundamental_rms_v > 0.05 * self.declared_v {
                    e.phase_jump_deg = Some(jump);
                }
            }
        }
        self.result
    }
}
