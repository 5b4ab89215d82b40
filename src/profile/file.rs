//! Event files (TOML): a sequence of steps with their phase.

use super::*;
use toml::de::{DeTable, DeValue};

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
    let file = EventFile { text, path };
    let doc = DeTable::parse(text).map_err(|e| {
        file.at(
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
        match key.get_ref().as_ref() {
            "phase" => {
                let text = scalar(value.get_ref()).unwrap_or_default();
                phase_deg = crate::units::parse_phase_deg(&text).ok_or_else(|| {
                    file.at(
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
                    .ok_or_else(|| {
                        file.at(span, "edge", format!("`{text}` is not a positive time"))
                    })?;
            }
            "event" => {
                let Some(list) = value.get_ref().as_array() else {
                    return Err(file.at(span, "event", "must be [[event]] tables".into()));
                };
                for (index, item) in list.iter().enumerate() {
                    steps.push(file.step(index + 1, item)?);
                }
            }
            other => {
                return Err(file.at(
                    key.span(),
                    other,
                    "unknown top-level field (expected phase, edge or [[event]])".into(),
                ))
            }
        }
    }
    if steps.is_empty() {
        return Err(file.at(0..0, "event", "no [[event]] tables".into()));
    }
    Ok(Profile {
        steps,
        phase_deg,
        edge_s,
    })
}

/// A scalar field's text (a string, or a number as written).
fn scalar(v: &DeValue<'_>) -> Option<String> {
    match v {
        DeValue::String(s) => Some(s.to_string()),
        DeValue::Integer(i) => Some(i.as_str().to_string()),
        DeValue::Float(f) => Some(f.as_str().to_string()),
        _ => None,
    }
}

/// The event file being read: its text (for positions) and its name.
struct EventFile<'a> {
    text: &'a str,
    path: &'a str,
}

/// One `[[event]]` table being read: its number (1-based), kind and fields.
struct EventItem<'a, 'f> {
    file: &'f EventFile<'a>,
    n: usize,
    kind: &'f str,
    span: Span,
    table: &'f DeTable<'a>,
}

type Span = std::ops::Range<usize>;

impl EventFile<'_> {
    /// An error at a byte span of the file.
    fn at(&self, span: Span, field: &str, message: String) -> EventFileError {
        let text = self.text;
        let start = span.start.min(text.len());
        let line = text[..start].matches('\n').count() + 1;
        let line_start = text[..start].rfind('\n').map_or(0, |i| i + 1);
        EventFileError {
            path: self.path.to_string(),
            line,
            column: text[line_start..start].chars().count() + 1,
            field: field.to_string(),
            message,
        }
    }

    /// The `n`th `[[event]]` table as a step: its kind, its fields checked against the kind's.
    fn step<'f>(
        &'f self,
        n: usize,
        item: &'f toml::Spanned<DeValue<'_>>,
    ) -> Result<Step, EventFileError> {
        let Some(table) = item.get_ref().as_table() else {
            return Err(self.at(item.span(), &format!("event.{n}"), "must be a table".into()));
        };
        let Some((kind, kind_span)) = table
            .get("kind")
            .and_then(|v| scalar(v.get_ref()).map(|s| (s, v.span())))
        else {
            return Err(self.at(item.span(), &format!("event.{n}"), "missing `kind`".into()));
        };
        let allowed: &[&str] = match kind.as_str() {
            "dip" => &["kind", "residual", "duration"],
            "interrupt" | "gap" => &["kind", "duration"],
            "swell" => &["kind", "level", "duration"],
            "vary" => &["kind", "residual", "decrease", "hold", "increase"],
            "ramp" => &["kind", "from", "to", "duration"],
            other => {
                return Err(self.at(
                    kind_span,
                    &format!("event.{n}.kind"),
                    format!(
                        "unknown event kind `{other}` (dip, interrupt, swell, vary, ramp, gap)"
                    ),
                ))
            }
        };
        for (k, v) in table {
            let field = format!("event.{n}.{}", k.get_ref());
            if !allowed.contains(&k.get_ref().as_ref()) {
                return Err(self.at(
                    k.span(),
                    &field,
                    format!("unknown field for a {kind} (known: {})", allowed.join(", ")),
                ));
            }
            if scalar(v.get_ref()).is_none() {
                return Err(self.at(v.span(), &field, "must be a string or number".into()));
            }
        }
        let e = EventItem {
            file: self,
            n,
            kind: &kind,
            span: item.span(),
            table,
        };
        Ok(match kind.as_str() {
            "dip" => Step::Dip {
                residual: e.bounded("residual", true)?,
                duration: e.duration("duration")?,
            },
            "interrupt" => Step::Dip {
                residual: 0.0,
                duration: e.duration("duration")?,
            },
            "swell" => Step::Swell {
                level: e.bounded("level", false)?,
                duration: e.duration("duration")?,
            },
            "vary" => Step::Variation {
                residual: e.level("residual")?,
                decrease: e.duration("decrease")?,
                hold: e.duration("hold")?,
                increase: e.duration("increase")?,
            },
            "ramp" => Step::Ramp {
                from: e.level("from")?,
                to: e.level("to")?,
                duration: e.duration("duration")?,
            },
            _ => Step::Gap {
                duration: e.duration("duration")?,
            },
        })
    }
}

// Each field is read by the compact grammar's own readers; their errors are moved to the
// field's position in the file.
impl EventItem<'_, '_> {
    /// A field's text and span; an error when the kind needs it and it is missing.
    fn get(&self, name: &str) -> Result<(String, Span), EventFileError> {
        self.table
            .get(name)
            .and_then(|v| scalar(v.get_ref()).map(|s| (s, v.span())))
            .ok_or_else(|| {
                self.file.at(
                    self.span.clone(),
                    &format!("event.{}", self.n),
                    format!("a {} needs `{name}`", self.kind),
                )
            })
    }

    /// A level field (`40%`).
    fn level(&self, name: &str) -> Result<f64, EventFileError> {
        let (text, span) = self.get(name)?;
        parse_level(&text, Field { text: &text, at: 0 }).map_err(|e| {
            self.file
                .at(span, &format!("event.{}.{name}", self.n), e.message)
        })
    }

    /// A duration field (`10cyc`, `200ms`).
    fn duration(&self, name: &str) -> Result<Duration, EventFileError> {
        let (text, span) = self.get(name)?;
        parse_duration(&text, Field { text: &text, at: 0 }).map_err(|e| {
            self.file
                .at(span, &format!("event.{}.{name}", self.n), e.message)
        })
    }

    /// A level that must lie below 100% (a dip's residual) or above it (a swell's level).
    fn bounded(&self, name: &str, below: bool) -> Result<f64, EventFileError> {
        let v = self.level(name)?;
        if (below && v >= 1.0) || (!below && v <= 1.0) {
            let (_, span) = self.get(name)?;
            return Err(self.file.at(
                span,
                &format!("event.{}.{name}", self.n),
                if below {
                    "a dip's residual is below 100% (use a swell above it)".into()
                } else {
                    "a swell's level is above 100% (use a dip below it)".into()
                },
            ));
        }
        Ok(v)
    }
}
