//! The RMS envelope an event compiles to, and a profile's compact form.

use super::*;

/// A point of the RMS envelope: time since onset (s), level (fraction of nominal).
pub type EnvelopePoint = (f64, f64);

/// The level of the supply over time, piecewise linear, starting at nominal at onset.
#[derive(Clone, Debug, PartialEq)]
pub struct Envelope {
    /// Corner points in time order; before the first the level is its level, after the last
    /// the last level holds.
    pub points: Arc<[EnvelopePoint]>,
    /// Time since onset at which the last step ends (the event's end), seconds.
    pub end_s: f64,
    /// Onset and end times of each disturbance step (gaps excluded), since onset.
    pub windows: Vec<(f64, f64)>,
}

impl Envelope {
    /// If the level is constant around time `t` since onset, the time since onset at which
    /// that constant stretch ends (infinity for the final level).
    pub fn constant_until(&self, t: f64) -> Option<f64> {
        let p = &self.points;
        let k = p.partition_point(|&(time, _)| time <= t);
        if k == 0 {
            return None;
        }
        match p.get(k) {
            None => Some(f64::INFINITY),
            Some(&(end, level)) if level == p[k - 1].1 => Some(end),
            Some(_) => None,
        }
    }

    /// The level at time `t` since onset.
    pub fn level(&self, t: f64) -> f64 {
        let p = &self.points;
        if p.is_empty() {
            return 1.0;
        }
        if t <= p[0].0 {
            return p[0].1;
        }
        let k = p.partition_point(|&(time, _)| time <= t);
        if k >= p.len() {
            return p[p.len() - 1].1;
        }
        let (t0, l0) = p[k - 1];
        let (t1, l1) = p[k];
        if t1 > t0 {
            l0 + (l1 - l0) * (t - t0) / (t1 - t0)
        } else {
            l1
        }
    }
}

impl Profile {
    /// The envelope of this profile at mains frequency `frequency_hz`.
    pub fn envelope(&self, frequency_hz: f64) -> Envelope {
        let edge = self.edge_s;
        let mut points: Vec<EnvelopePoint> = vec![(0.0, 1.0)];
        let mut windows = Vec::new();
        let mut t = 0.0;
        let mut level = 1.0;
        // Moves the level to `to` over `over` seconds (at least one edge).
        let go =
            |points: &mut Vec<EnvelopePoint>, t: &mut f64, level: &mut f64, to: f64, over: f64| {
                let over = over.max(edge);
                *t += over;
                *level = to;
                points.push((*t, to));
            };
        for step in &self.steps {
            match *step {
                Step::Dip {
                    residual: x,
                    duration,
                }
                | Step::Swell { level: x, duration } => {
                    let start = t;
                    go(&mut points, &mut t, &mut level, x, 0.0);
                    // The duration counts from the start of the change.
                    let hold = (duration.seconds(frequency_hz) - edge).max(0.0);
                    t += hold;
                    points.push((t, x));
                    go(&mut points, &mut t, &mut level, 1.0, 0.0);
                    windows.push((start, t));
                }
                Step::Variation {
                    residual,
                    decrease,
                    hold,
                    increase,
                } => {
                    let start = t;
                    go(
                        &mut points,
                        &mut t,
                        &mut level,
                        residual,
                        decrease.seconds(frequency_hz),
                    );
                    t += hold.seconds(frequency_hz);
                    points.push((t, residual));
                    go(
                        &mut points,
                        &mut t,
                        &mut level,
                        1.0,
                        increase.seconds(frequency_hz),
                    );
                    windows.push((start, t));
                }
                Step::Ramp { from, to, duration } => {
                    let start = t;
                    if (from - level).abs() > 1e-12 {
                        go(&mut points, &mut t, &mut level, from, 0.0);
                    }
                    go(
                        &mut points,
                        &mut t,
                        &mut level,
                        to,
                        duration.seconds(frequency_hz),
                    );
                    windows.push((start, t));
                }
                Step::Gap { duration } => {
                    if (level - 1.0).abs() > 1e-12 {
                        go(&mut points, &mut t, &mut level, 1.0, 0.0);
                    }
                    t += duration.seconds(frequency_hz);
                    points.push((t, 1.0));
                }
            }
        }
        Envelope {
            points: points.into(),
            end_s: t,
            windows,
        }
    }

    /// The compact form of this profile.
    pub fn spec(&self) -> String {
        let items: Vec<String> = self
            .steps
            .iter()
            .enumerate()
            .map(|(k, s)| {
                let mut text = match s {
                    Step::Dip { residual, duration } if *residual == 0.0 => {
                        format!("interrupt:{duration}")
                    }
                    Step::Dip { residual, duration } => {
                        format!("dip:{}%:{duration}", percent(*residual))
                    }
                    Step::Swell { level, duration } => {
                        format!("swell:{}%:{duration}", percent(*level))
                    }
                    Step::Variation {
                        residual,
                        decrease,
                        hold,
                        increase,
                    } => format!("vary:{}%:{decrease}/{hold}/{increase}", percent(*residual)),
                    Step::Ramp { from, to, duration } => {
                        format!("ramp:{}%-{}%:{duration}", percent(*from), percent(*to))
                    }
                    Step::Gap { duration } => format!("gap:{duration}"),
                };
                if k == 0 && self.phase_deg != 0.0 {
                    text += &format!("@{}", self.phase_deg);
                }
                text
            })
            .collect();
        items.join(";")
    }
}
