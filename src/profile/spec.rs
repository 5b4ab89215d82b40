//! The compact event grammar: `dip:40%:10cyc@90`, sequences with `;`.

use super::*;

pub(crate) fn percent(fraction: f64) -> String {
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

pub(crate) fn spec_error(
    spec: &str,
    start: usize,
    len: usize,
    message: impl Into<String>,
) -> SpecError {
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
pub(crate) struct Field<'a> {
    pub(crate) text: &'a str,
    pub(crate) at: usize,
}

pub(crate) fn parse_level(spec: &str, f: Field<'_>) -> Result<f64, SpecError> {
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

/// The longest step of an event, seconds (one day: no supply study needs more).
pub const MAX_EVENT_S: f64 = 86_400.0;
/// The longest step of an event, cycles (one day at 60 Hz).
pub const MAX_EVENT_CYCLES: f64 = 5_184_000.0;

pub(crate) fn parse_duration(spec: &str, f: Field<'_>) -> Result<Duration, SpecError> {
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
    let too_long = match duration {
        Duration::Cycles(n) => n > MAX_EVENT_CYCLES,
        Duration::Seconds(s) => s > MAX_EVENT_S,
    };
    if too_long {
        return Err(spec_error(
            spec,
            f.at,
            f.text.len(),
            format!(
                "`{}` is longer than any study needs: a step lasts at most {MAX_EVENT_S} s (one \
                 day) or {MAX_EVENT_CYCLES} cycles",
                f.text
            ),
        ));
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
            phase_deg = crate::units::parse_phase_deg(text).ok_or_else(|| {
                spec_error(
                    spec,
                    at,
                    text.len(),
                    format!("`{text}` is not a phase angle in degrees"),
                )
            })?;
        }
        steps.push(parse_step(spec, item_at, body)?);
    }
    Ok(Profile {
        steps,
        phase_deg,
        edge_s,
    })
}

/// One item of a compact spec (without its phase suffix), which starts at byte `item_at`.
///
/// One arm per event kind, each with its own form and checks: kept whole so that the
/// grammar reads in one place (over 120 lines).
fn parse_step(spec: &str, item_at: usize, body: &str) -> Result<Step, SpecError> {
    let mut fields = Vec::new();
    let mut at = item_at;
    for part in body.split(':') {
        fields.push(Field { text: part, at });
        at += part.len() + 1;
    }
    let kind = fields[0];
    let expect = |n: usize, form: &str| -> Result<(), SpecError> {
        if fields.len() == n {
            Ok(())
        } else {
            Err(spec_error(
                spec,
                item_at,
                body.len(),
                format!("`{}` takes the form {form}", kind.text.trim()),
            ))
        }
    };
    Ok(match kind.text.trim() {
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
                    "unknown event kind `{other}` (dip, interrupt, swell, vary, ramp, gap, or a preset name: see `sagtrip presets`)"
                ),
            ))
        }
    })
}
