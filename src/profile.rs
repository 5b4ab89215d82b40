//! Supply disturbance profiles: dips, short interruptions, voltage variations, swells, slow
//! ramps and sequences of them, as an RMS envelope over the nominal sine.
//!
//! A profile is a list of steps in time order, each relative to the end of the previous
//! one. It compiles into an [`Envelope`]: the ratio of the RMS level to nominal as a
//! piecewise-linear function of the time since the first event's onset. Abrupt changes take
//! a finite edge time (default [`DEFAULT_EDGE_S`]).
//!
//! The compact form (see `docs/events.md`) is one item or several joined by `;`:
//!
//! ```text
//! dip:40%:10cyc@90        residual 40% for 10 cycles, starting at 90 degrees
//! interrupt:250cyc        residual 0% for 250 cycles
//! swell:120%:25cyc        120% for 25 cycles
//! vary:70%:0cyc/1cyc/25cyc   down to 70% in 0 cycles, hold 1 cycle, back up in 25 cycles
//! ramp:100%-65%:20s       from 100% to 65% over 20 s (and stay there)
//! gap:20cyc               nominal supply between two events of a sequence
//! ```

use std::fmt;
use std::sync::Arc;

use crate::units::{parse_value, Quantity};

/// Edge (rise and fall) time of an abrupt change, seconds: the IEC 61000-4-11 test
/// generator must switch within 1 to 5 us into a resistive load; we use the slow end.
pub const DEFAULT_EDGE_S: f64 = 5e-6;

/// A duration, in mains cycles or seconds.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Duration {
    /// A number of mains cycles (fractions allowed, e.g. 0.5).
    Cycles(f64),
    /// Seconds.
    Seconds(f64),
}

impl Duration {
    /// The duration in seconds at mains frequency `frequency_hz`.
    pub fn seconds(self, frequency_hz: f64) -> f64 {
        match self {
            Duration::Cycles(n) => n / frequency_hz,
            Duration::Seconds(s) => s,
        }
    }
}

impl fmt::Display for Duration {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        // At most four decimals (a tenth of a microsecond in milliseconds): a duration
        // found by bisection reads 545.5595ms, not every digit of its binary value.
        let short = |x: f64| {
            let text = format!("{x:.4}");
            let text = text.trim_end_matches('0').trim_end_matches('.');
            text.to_string()
        };
        match *self {
            Duration::Cycles(n) => write!(f, "{}cyc", short(n)),
            Duration::Seconds(s) if s < 1.0 => write!(f, "{}ms", short(s * 1e3)),
            Duration::Seconds(s) => write!(f, "{}s", short(s)),
        }
    }
}

/// One step of a profile.
#[derive(Clone, Debug, PartialEq)]
pub enum Step {
    /// The supply falls to `residual` (fraction of nominal) for `duration`.
    Dip {
        /// Residual voltage, fraction of nominal (0.4 for 40%).
        residual: f64,
        /// Time at the residual level.
        duration: Duration,
    },
    /// The supply rises to `level` (fraction of nominal, above 1) for `duration`.
    Swell {
        /// Level, fraction of nominal.
        level: f64,
        /// Time at the level.
        duration: Duration,
    },
    /// A gradual variation: down to `residual` over `decrease`, held for `hold`, back to
    /// nominal over `increase`.
    Variation {
        /// Reduced level, fraction of nominal.
        residual: f64,
        /// Time to go down (0 for abrupt).
        decrease: Duration,
        /// Time at the reduced level.
        hold: Duration,
        /// Time to come back up.
        increase: Duration,
    },
    /// A slow linear ramp of the level from `from` to `to` over `duration`; the supply then
    /// stays at `to`.
    Ramp {
        /// Starting level, fraction of nominal.
        from: f64,
        /// Final level, fraction of nominal.
        to: f64,
        /// Ramp time.
        duration: Duration,
    },
    /// Nominal supply for `duration` (between events of a sequence).
    Gap {
        /// Time at nominal.
        duration: Duration,
    },
}

/// A disturbance profile: steps in order, the phase angle of the first onset and the edge
/// time of abrupt changes.
#[derive(Clone, Debug, PartialEq)]
pub struct Profile {
    /// Steps in time order.
    pub steps: Vec<Step>,
    /// Phase angle of the mains sine at the first onset, degrees (0 = rising zero crossing).
    pub phase_deg: f64,
    /// Rise and fall time of abrupt changes, seconds.
    pub edge_s: f64,
}

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

fn percent(fraction: f64) -> String {
    let p = fraction * 100.0;
    let text = format!("{p:.3}");
    text.trim_end_matches('0').trim_end_matches('.').to_string()
}

/// Why a profile spec was not understood: the message and the character range at fault.
#[derive(Clone, Debug, PartialEq, thiserror::Error)]
#[error("{message}\n  {spec}\n  {marker}")]
pub struct SpecError {
    /// What is wrong.
    pub message: String,
    /// The spec as given.
    pub spec: String,
    /// A line of spaces and carets under the offending part.
    pub marker: String,
    /// Byte offset of the offending part.
    pub at: usize,
}

fn spec_error(spec: &str, start: usize, len: usize, message: impl Into<String>) -> SpecError {
    let prefix = spec[..start.min(spec.len())].chars().count();
    SpecError {
        message: message.into(),
        spec: spec.to_string(),
        marker: format!("{}{}", " ".repeat(prefix), "^".repeat(len.max(1))),
        at: start,
    }
}

/// A field of a spec item with its byte offset in the whole spec.
#[derive(Clone, Copy)]
struct Field<'a> {
    text: &'a str,
    at: usize,
}

fn parse_level(spec: &str, f: Field<'_>) -> Result<f64, SpecError> {
    let Some(number) = f.text.strip_suffix('%') else {
        return Err(spec_error(
            spec,
            f.at,
            f.text.len(),
            format!(
                "a level is a percentage of nominal, e.g. 40%, found `{}`",
                f.text
            ),
        ));
    };
    match number.trim().parse::<f64>() {
        Ok(v) if v.is_finite() && v >= 0.0 => Ok(v / 100.0),
        _ => Err(spec_error(
            spec,
            f.at,
            f.text.len(),
            format!("`{}` is not a non-negative percentage", f.text),
        )),
    }
}

fn parse_duration(spec: &str, f: Field<'_>) -> Result<Duration, SpecError> {
    let text = f.text.trim();
    let bad = || {
        spec_error(
            spec,
            f.at,
            f.text.len(),
            format!(
                "a duration is e.g. 10cyc, 0.5cyc, 200ms or 5s, found `{}`",
                f.text
            ),
        )
    };
    let duration = if let Some(n) = text.strip_suffix("cyc") {
        Duration::Cycles(n.trim().parse::<f64>().map_err(|_| bad())?)
    } else if text.ends_with('s') {
        Duration::Seconds(parse_value(text, Quantity::Time).map_err(|_| bad())?)
    } else {
        return Err(bad());
    };
    let value = match duration {
        Duration::Cycles(v) | Duration::Seconds(v) => v,
    };
    if !value.is_finite() || value < 0.0 {
        return Err(bad());
    }
    Ok(duration)
}

/// Reads a compact profile spec. `edge_s` is the edge time of abrupt changes.
///
/// ```
/// use sagtrip::profile::{parse_spec, Step, Duration, DEFAULT_EDGE_S};
/// let p = parse_spec("dip:40%:10cyc@90", DEFAULT_EDGE_S).unwrap();
/// assert_eq!(p.phase_deg, 90.0);
/// assert_eq!(p.steps, [Step::Dip { residual: 0.4, duration: Duration::Cycles(10.0) }]);
/// assert!(parse_spec("dip:40:10cyc", DEFAULT_EDGE_S).is_err());
/// ```
pub fn parse_spec(spec: &str, edge_s: f64) -> Result<Profile, SpecError> {
    let mut steps = Vec::new();
    let mut phase_deg = 0.0;
    let mut offset = 0;
    if spec.trim().is_empty() {
        return Err(spec_error(spec, 0, 1, "empty event spec"));
    }
    for (index, item) in spec.split(';').enumerate() {
        let item_at = offset;
        offset += item.len() + 1;
        // Phase suffix on the first item only.
        let (body, phase) = match item.rfind('@') {
            Some(k) => (&item[..k], Some((&item[k + 1..], item_at + k + 1))),
            None => (item, None),
        };
        if let Some((text, at)) = phase {
            if index != 0 {
                return Err(spec_error(
                    spec,
                    at - 1,
                    text.len() + 1,
                    "a start phase (@degrees) belongs to the first event only",
                ));
            }
            phase_deg = text
                .trim()
                .trim_end_matches("deg")
                .parse::<f64>()
                .ok()
                .filter(|v| v.is_finite())
                .ok_or_else(|| {
                    spec_error(
                        spec,
                        at,
                        text.len(),
                        format!("`{text}` is not a phase angle in degrees"),
                    )
                })?;
        }
        let mut fields = Vec::new();
        let mut at = item_at;
        for part in body.split(':') {
            fields.push(Field { text: part, at });
            at += part.len() + 1;
        }
        let kind = fields[0];
        let expect = |n: usize, form: &str| -> Result<(), SpecError> {
            if fields.len() != n {
                Err(spec_error(
                    spec,
                    item_at,
                    body.len(),
                    format!("`{}` takes the form {form}", kind.text.trim()),
                ))
            } else {
                Ok(())
            }
        };
        let step = match kind.text.trim() {
            "dip" => {
                expect(3, "dip:RESIDUAL%:DURATION")?;
                let residual = parse_level(spec, fields[1])?;
                if residual >= 1.0 {
                    return Err(spec_error(
                        spec,
                        fields[1].at,
                        fields[1].text.len(),
                        "a dip's residual is below 100% (use swell: above it)",
                    ));
                }
                Step::Dip {
                    residual,
                    duration: parse_duration(spec, fields[2])?,
                }
            }
            "interrupt" => {
                expect(2, "interrupt:DURATION")?;
                Step::Dip {
                    residual: 0.0,
                    duration: parse_duration(spec, fields[1])?,
                }
            }
            "swell" => {
                expect(3, "swell:LEVEL%:DURATION")?;
                let level = parse_level(spec, fields[1])?;
                if level <= 1.0 {
                    return Err(spec_error(
                        spec,
                        fields[1].at,
                        fields[1].text.len(),
                        "a swell's level is above 100% (use dip: below it)",
                    ));
                }
                Step::Swell {
                    level,
                    duration: parse_duration(spec, fields[2])?,
                }
            }
            "vary" => {
                expect(3, "vary:RESIDUAL%:DECREASE/HOLD/INCREASE")?;
                let residual = parse_level(spec, fields[1])?;
                let times: Vec<&str> = fields[2].text.split('/').collect();
                if times.len() != 3 {
                    return Err(spec_error(
                        spec,
                        fields[2].at,
                        fields[2].text.len(),
                        "three durations: DECREASE/HOLD/INCREASE, e.g. 0cyc/1cyc/25cyc",
                    ));
                }
                let mut at = fields[2].at;
                let mut parsed = Vec::new();
                for t in times {
                    parsed.push(parse_duration(spec, Field { text: t, at })?);
                    at += t.len() + 1;
                }
                Step::Variation {
                    residual,
                    decrease: parsed[0],
                    hold: parsed[1],
                    increase: parsed[2],
                }
            }
            "ramp" => {
                expect(3, "ramp:FROM%-TO%:DURATION")?;
                let Some((from, to)) = fields[1].text.split_once('-') else {
                    return Err(spec_error(
                        spec,
                        fields[1].at,
                        fields[1].text.len(),
                        "a ramp's levels are FROM%-TO%, e.g. 100%-65%",
                    ));
                };
                Step::Ramp {
                    from: parse_level(spec, Field { text: from, at: fields[1].at })?,
                    to: parse_level(
                        spec,
                        Field {
                            text: to,
                            at: fields[1].at + from.len() + 1,
                        },
                    )?,
                    duration: parse_duration(spec, fields[2])?,
                }
            }
            "gap" => {
                expect(2, "gap:DURATION")?;
                Step::Gap {
                    duration: parse_duration(spec, fields[1])?,
                }
            }
            other => {
                return Err(spec_error(
                    spec,
                    kind.at,
                    kind.text.len(),
                    format!(
                        "unknown event kind `{other}` (dip, interrupt, swell, vary, ramp, gap, or a preset name: see `sagtrip profiles`)"
                    ),
                ))
            }
        };
        steps.push(step);
    }
    Ok(Profile {
        steps,
        phase_deg,
        edge_s,
    })
}

/// A built-in test from the preferred levels and durations of IEC 61000-4-11.
#[derive(Clone, Debug, PartialEq)]
pub struct Preset {
    /// Name used with `--event`, e.g. `class3-dip-40`.
    pub name: String,
    /// Which table of the standard it comes from.
    pub table: &'static str,
    /// Test class (2 or 3).
    pub class: u8,
    /// The profile at 50 Hz and at 60 Hz (durations differ in cycles).
    pub profile_50hz: Profile,
    /// The profile at 60 Hz.
    pub profile_60hz: Profile,
}

/// The preferred test levels and durations of IEC 61000-4-11 for classes 2 and 3: Table 1
/// (dips), Table 2 (short interruptions), Table 3 (voltage variation).
pub fn iec_presets() -> Vec<Preset> {
    let dip = |residual: f64, c50: f64, c60: f64| {
        (
            Step::Dip {
                residual,
                duration: Duration::Cycles(c50),
            },
            Step::Dip {
                residual,
                duration: Duration::Cycles(c60),
            },
        )
    };
    let vary = |c50: f64, c60: f64| {
        (
            Step::Variation {
                residual: 0.7,
                decrease: Duration::Cycles(0.0),
                hold: Duration::Cycles(1.0),
                increase: Duration::Cycles(c50),
            },
            Step::Variation {
                residual: 0.7,
                decrease: Duration::Cycles(0.0),
                hold: Duration::Cycles(1.0),
                increase: Duration::Cycles(c60),
            },
        )
    };
    let table1 = "IEC 61000-4-11 Table 1 (dips)";
    let table2 = "IEC 61000-4-11 Table 2 (short interruptions)";
    let table3 = "IEC 61000-4-11 Table 3 (voltage variation)";
    let mut list: Vec<(String, &'static str, u8, (Step, Step))> = Vec::new();
    for class in [2u8, 3] {
        list.push((
            format!("class{class}-dip-0-half"),
            table1,
            class,
            dip(0.0, 0.5, 0.5),
        ));
        list.push((
            format!("class{class}-dip-0-1cyc"),
            table1,
            class,
            dip(0.0, 1.0, 1.0),
        ));
        if class == 3 {
            list.push((
                format!("class{class}-dip-40"),
                table1,
                class,
                dip(0.4, 10.0, 12.0),
            ));
        }
        list.push((
            format!("class{class}-dip-70"),
            table1,
            class,
            dip(0.7, 25.0, 30.0),
        ));
        if class == 3 {
            list.push((
                format!("class{class}-dip-80"),
                table1,
                class,
                dip(0.8, 250.0, 300.0),
            ));
        }
        list.push((
            format!("class{class}-interrupt"),
            table2,
            class,
            dip(0.0, 250.0, 300.0),
        ));
        list.push((
            format!("class{class}-vary-70"),
            table3,
            class,
            vary(25.0, 30.0),
        ));
    }
    list.into_iter()
        .map(|(name, table, class, (s50, s60))| Preset {
            name,
            table,
            class,
            profile_50hz: Profile {
                steps: vec![s50],
                phase_deg: 0.0,
                edge_s: DEFAULT_EDGE_S,
            },
            profile_60hz: Profile {
                steps: vec![s60],
                phase_deg: 0.0,
                edge_s: DEFAULT_EDGE_S,
            },
        })
        .collect()
}

/// Reads `--event`: a preset name (optionally with `@degrees`) or a compact spec.
/// Durations of presets follow `frequency_hz` (50 or 60 Hz cycles).
pub fn resolve(spec: &str, frequency_hz: f64, edge_s: f64) -> Result<Profile, SpecError> {
    let (name, phase) = match spec.rsplit_once('@') {
        Some((n, p)) => (n, Some(p)),
        None => (spec, None),
    };
    if let Some(preset) = iec_presets().into_iter().find(|p| p.name == name.trim()) {
        let mut profile = if (frequency_hz - 60.0).abs() < 5.0 {
            preset.profile_60hz
        } else {
            preset.profile_50hz
        };
        profile.edge_s = edge_s;
        if let Some(p) = phase {
            profile.phase_deg = p
                .trim()
                .trim_end_matches("deg")
                .parse::<f64>()
                .map_err(|_| {
                    spec_error(
                        spec,
                        name.len() + 1,
                        p.len(),
                        format!("`{p}` is not a phase angle in degrees"),
                    )
                })?;
        }
        return Ok(profile);
    }
    parse_spec(spec, edge_s)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn compact_forms() {
        let p = parse_spec("interrupt:250cyc", DEFAULT_EDGE_S).unwrap();
        assert_eq!(
            p.steps,
            [Step::Dip {
                residual: 0.0,
                duration: Duration::Cycles(250.0)
            }]
        );
        let p = parse_spec("swell:120%:25cyc", DEFAULT_EDGE_S).unwrap();
        assert_eq!(
            p.steps,
            [Step::Swell {
                level: 1.2,
                duration: Duration::Cycles(25.0)
            }]
        );
        let p = parse_spec("vary:70%:0cyc/1cyc/25cyc", DEFAULT_EDGE_S).unwrap();
        assert!(
            matches!(p.steps[0], Step::Variation { residual, .. } if (residual - 0.7).abs() < 1e-12)
        );
        let p = parse_spec("ramp:100%-65%:20s", DEFAULT_EDGE_S).unwrap();
        assert_eq!(
            p.steps,
            [Step::Ramp {
                from: 1.0,
                to: 0.65,
                duration: Duration::Seconds(20.0)
            }]
        );
        let p = parse_spec("interrupt:10cyc;gap:200ms;interrupt:10cyc", DEFAULT_EDGE_S).unwrap();
        assert_eq!(p.steps.len(), 3);
        assert_eq!(p.spec(), "interrupt:10cyc;gap:200ms;interrupt:10cyc");
    }

    #[test]
    fn errors_point_at_the_fault() {
        let e = parse_spec("dip:40%:10cycles", DEFAULT_EDGE_S).unwrap_err();
        assert_eq!(e.at, 8);
        assert!(e.to_string().contains("        ^^^^^^^^"), "{e}");
        let e = parse_spec("dip:40:10cyc", DEFAULT_EDGE_S).unwrap_err();
        assert_eq!(e.at, 4);
        let e = parse_spec("sag:40%:10cyc", DEFAULT_EDGE_S).unwrap_err();
        assert!(e.message.contains("unknown event kind `sag`"));
        let e = parse_spec("dip:40%:10cyc;dip:40%:1cyc@90", DEFAULT_EDGE_S).unwrap_err();
        assert!(e.message.contains("first event only"));
        let e = parse_spec("swell:90%:1cyc", DEFAULT_EDGE_S).unwrap_err();
        assert!(e.message.contains("above 100%"));
    }

    #[test]
    fn envelope_of_a_dip() {
        let p = parse_spec("dip:40%:10cyc", 5e-6).unwrap();
        let e = p.envelope(50.0);
        assert_eq!(e.level(0.0), 1.0);
        assert!((e.level(2.5e-6) - 0.7).abs() < 1e-12);
        assert_eq!(e.level(0.1), 0.4);
        // Duration counts from the start of the fall: 200 ms, then a 5 us rise.
        assert!((e.level(0.2 + 2.5e-6) - 0.7).abs() < 1e-9);
        assert_eq!(e.level(0.3), 1.0);
        assert!((e.end_s - 0.200_005).abs() < 1e-12);
    }
}

/// A problem in an event file: where and what.
#[derive(Clone, Debug, PartialEq, thiserror::Error)]
#[error("{path}:{line}:{column}: {field}: {message}")]
pub struct EventFileError {
    /// The file as named.
    pub path: String,
    /// 1-based line.
    pub line: usize,
    /// 1-based column.
    pub column: usize,
    /// Dotted field path, e.g. `event.2.duration`.
    pub field: String,
    /// What is wrong.
    pub message: String,
}

/// Reads a TOML event file: optional `phase` (degrees) and `edge` (time), then one
/// `[[event]]` table per step with `kind` (dip, interrupt, swell, vary, ramp, gap) and the
/// kind's fields (`residual`, `level`, `duration`, `decrease`, `hold`, `increase`, `from`,
/// `to`), written as in the compact form (`"40%"`, `"10cyc"`, `"200ms"`).
///
/// ```
/// let text = "phase = 90\n[[event]]\nkind = \"interrupt\"\nduration = \"10cyc\"\n\
///             [[event]]\nkind = \"gap\"\nduration = \"20cyc\"\n\
///             [[event]]\nkind = \"dip\"\nresidual = \"40%\"\nduration = \"5cyc\"\n";
/// let p = sagtrip::profile::parse_event_file(text, "reclose.toml").unwrap();
/// assert_eq!(p.spec(), "interrupt:10cyc@90;gap:20cyc;dip:40%:5cyc");
/// ```
pub fn parse_event_file(text: &str, path: &str) -> Result<Profile, EventFileError> {
    use toml::de::{DeTable, DeValue};
    let at = |span: std::ops::Range<usize>, field: &str, message: String| {
        let start = span.start.min(text.len());
        let line = text[..start].matches('\n').count() + 1;
        let line_start = text[..start].rfind('\n').map_or(0, |i| i + 1);
        EventFileError {
            path: path.to_string(),
            line,
            column: text[line_start..start].chars().count() + 1,
            field: field.to_string(),
            message,
        }
    };
    let doc = DeTable::parse(text).map_err(|e| {
        at(
            e.span().unwrap_or(0..0),
            "(syntax)",
            e.message().trim().to_string(),
        )
    })?;
    let mut phase_deg = 0.0;
    let mut edge_s = DEFAULT_EDGE_S;
    let mut steps = Vec::new();
    for (key, value) in doc.get_ref() {
        let span = value.span();
        let scalar = |v: &DeValue<'_>| -> Option<String> {
            match v {
                DeValue::String(s) => Some(s.to_string()),
                DeValue::Integer(i) => Some(i.as_str().to_string()),
                DeValue::Float(f) => Some(f.as_str().to_string()),
                _ => None,
            }
        };
        match key.get_ref().as_ref() {
            "phase" => {
                let text = scalar(value.get_ref()).unwrap_or_default();
                phase_deg = text
                    .trim()
                    .trim_end_matches("deg")
                    .trim()
                    .parse()
                    .map_err(|_| {
                        at(
                            span,
                            "phase",
                            format!("`{text}` is not a phase angle in degrees"),
                        )
                    })?;
            }
            "edge" => {
                let text = scalar(value.get_ref()).unwrap_or_default();
                edge_s = parse_value(&text, Quantity::Time)
                    .ok()
                    .filter(|v| *v > 0.0)
                    .ok_or_else(|| at(span, "edge", format!("`{text}` is not a positive time")))?;
            }
            "event" => {
                let Some(list) = value.get_ref().as_array() else {
                    return Err(at(span, "event", "must be [[event]] tables".into()));
                };
                for (index, item) in list.iter().enumerate() {
                    let n = index + 1;
                    let Some(table) = item.get_ref().as_table() else {
                        return Err(at(
                            item.span(),
                            &format!("event.{n}"),
                            "must be a table".into(),
                        ));
                    };
                    let field = |name: &str| -> Option<(String, std::ops::Range<usize>)> {
                        table
                            .get(name)
                            .and_then(|v| scalar(v.get_ref()).map(|s| (s, v.span())))
                    };
                    let Some((kind, kind_span)) = field("kind") else {
                        return Err(at(
                            item.span(),
                            &format!("event.{n}"),
                            "missing `kind`".into(),
                        ));
                    };
                    let allowed: &[&str] = match kind.as_str() {
                        "dip" => &["kind", "residual", "duration"],
                        "interrupt" | "gap" => &["kind", "duration"],
                        "swell" => &["kind", "level", "duration"],
                        "vary" => &["kind", "residual", "decrease", "hold", "increase"],
                        "ramp" => &["kind", "from", "to", "duration"],
                        other => {
                            return Err(at(
                                kind_span,
                                &format!("event.{n}.kind"),
                                format!("unknown event kind `{other}` (dip, interrupt, swell, vary, ramp, gap)"),
                            ))
                        }
                    };
                    for (k, v) in table {
                        if !allowed.contains(&k.get_ref().as_ref()) {
                            return Err(at(
                                k.span(),
                                &format!("event.{n}.{}", k.get_ref()),
                                format!(
                                    "unknown field for a {kind} (known: {})",
                                    allowed.join(", ")
                                ),
                            ));
                        }
                        if scalar(v.get_ref()).is_none() {
                            return Err(at(
                                v.span(),
                                &format!("event.{n}.{}", k.get_ref()),
                                "must be a string or number".into(),
                            ));
                        }
                    }
                    // Each field is read by the compact grammar's own readers; their errors
                    // are moved to the field's position in the file.
                    let get =
                        |name: &str| -> Result<(String, std::ops::Range<usize>), EventFileError> {
                            field(name).ok_or_else(|| {
                                at(
                                    item.span(),
                                    &format!("event.{n}"),
                                    format!("a {kind} needs `{name}`"),
                                )
                            })
                        };
                    let level = |name: &str| -> Result<f64, EventFileError> {
                        let (text, span) = get(name)?;
                        parse_level(&text, Field { text: &text, at: 0 })
                            .map_err(|e| at(span, &format!("event.{n}.{name}"), e.message))
                    };
                    let duration = |name: &str| -> Result<Duration, EventFileError> {
                        let (text, span) = get(name)?;
                        parse_duration(&text, Field { text: &text, at: 0 })
                            .map_err(|e| at(span, &format!("event.{n}.{name}"), e.message))
                    };
                    let bounded = |name: &str, below: bool| -> Result<f64, EventFileError> {
                        let v = level(name)?;
                        if (below && v >= 1.0) || (!below && v <= 1.0) {
                            let (_, span) = get(name)?;
                            return Err(at(
                                span,
                                &format!("event.{n}.{name}"),
                                if below {
                                    "a dip's residual is below 100% (use a swell above it)".into()
                                } else {
                                    "a swell's level is above 100% (use a dip below it)".into()
                                },
                            ));
                        }
                        Ok(v)
                    };
                    steps.push(match kind.as_str() {
                        "dip" => Step::Dip {
                            residual: bounded("residual", true)?,
                            duration: duration("duration")?,
                        },
                        "interrupt" => Step::Dip {
                            residual: 0.0,
                            duration: duration("duration")?,
                        },
                        "swell" => Step::Swell {
                            level: bounded("level", false)?,
                            duration: duration("duration")?,
                        },
                        "vary" => Step::Variation {
                            residual: level("residual")?,
                            decrease: duration("decrease")?,
                            hold: duration("hold")?,
                            increase: duration("increase")?,
                        },
                        "ramp" => Step::Ramp {
                            from: level("from")?,
                            to: level("to")?,
                            duration: duration("duration")?,
                        },
                        _ => Step::Gap {
                            duration: duration("duration")?,
                        },
                    });
                }
            }
            other => {
                return Err(at(
                    key.span(),
                    other,
                    "unknown top-level field (expected phase, edge or [[event]])".into(),
                ))
            }
        }
    }
    if steps.is_empty() {
        return Err(at(0..0, "event", "no [[event]] tables".into()));
    }
    Ok(Profile {
        steps,
        phase_deg,
        edge_s,
    })
}
