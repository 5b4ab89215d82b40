//! Event files (TOML): a sequence of steps with their phase.

use super::*;

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
