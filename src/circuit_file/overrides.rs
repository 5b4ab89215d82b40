//! What-if values: `PART.FIELD=VALUE` written into a circuit file's text before it is
//! read, so that each is checked exactly as if it were written there.

use toml::de::{DeTable, DeValue};

/// One override: a part's field (or a field of one of its tables, such as
/// `mains.sine.frequency`) and the value as it would be written in the file.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Override {
    /// The part's name.
    pub part: String,
    /// The field, and the fields inside it for a nested table (`["sine", "frequency"]`).
    pub field: Vec<String>,
    /// The value as written (`22u`, `230V`, `true`).
    pub value: String,
}

impl std::fmt::Display for Override {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "{}.{}={}", self.part, self.field.join("."), self.value)
    }
}

/// Why an override cannot be applied.
#[derive(Clone, Debug, PartialEq, Eq, thiserror::Error)]
pub enum OverrideError {
    /// Not of the form `PART.FIELD=VALUE`.
    #[error("`{0}` is not PART.FIELD=VALUE (e.g. c_delay.capacitance=22u)")]
    Malformed(String),
    /// No part of that name.
    #[error("no part `{part}` in the circuit (parts: {})", known.join(", "))]
    UnknownPart {
        /// The name given.
        part: String,
        /// The circuit's parts.
        known: Vec<String>,
    },
    /// The field's place cannot take a value (a table given where a value goes, or a field
    /// inside a table the part does not have).
    #[error("part `{part}` has no table `{table}` to set `{field}` in")]
    NoTable {
        /// The part.
        part: String,
        /// The table missing.
        table: String,
        /// The field.
        field: String,
    },
    /// A field the file does not write, in a part not written as a `[part.NAME]` table.
    #[error("part `{part}` is not written as a [part.{part}] table: add `{field}` in the file")]
    CannotAdd {
        /// The part.
        part: String,
        /// The field.
        field: String,
    },
    /// The file is not valid TOML (the reader reports the details).
    #[error("the circuit file is not valid TOML")]
    Syntax,
}

/// Reads `PART.FIELD=VALUE`.
pub fn parse_override(text: &str) -> Result<Override, OverrideError> {
    let malformed = || OverrideError::Malformed(text.to_string());
    let (path, value) = text.split_once('=').ok_or_else(malformed)?;
    let mut names = path.trim().split('.').map(str::trim);
    let part = names
        .next()
        .filter(|p| !p.is_empty())
        .ok_or_else(malformed)?;
    let field: Vec<String> = names.map(str::to_string).collect();
    if field.is_empty() || field.iter().any(String::is_empty) || value.trim().is_empty() {
        return Err(malformed());
    }
    Ok(Override {
        part: part.to_string(),
        field,
        value: value.trim().to_string(),
    })
}

/// The value as TOML: booleans bare, anything else a string (the reader takes numbers with
/// units from strings).
fn as_toml(value: &str) -> String {
    match value {
        "true" | "false" => value.to_string(),
        _ => format!("\"{}\"", value.replace('\\', "\\\\").replace('"', "\\\"")),
    }
}

/// `text` with every override written in: a field the part writes has its value replaced
/// where it stands (so positions in messages stay those of the file); a field it does not
/// write is added on the line after its `[part.NAME]` header.
pub fn apply_overrides(text: &str, overrides: &[Override]) -> Result<String, OverrideError> {
    let mut text = text.to_string();
    for o in overrides {
        text = apply_one(&text, o)?;
    }
    Ok(text)
}

fn apply_one(text: &str, o: &Override) -> Result<String, OverrideError> {
    let doc = DeTable::parse(text).map_err(|_| OverrideError::Syntax)?;
    let root = doc.get_ref();
    let parts = root.get("part").and_then(|p| p.get_ref().as_table());
    let known = || {
        parts.map_or_else(Vec::new, |t| {
            t.keys().map(|k| k.get_ref().to_string()).collect()
        })
    };
    let Some(mut table) = parts
        .and_then(|t| t.get(o.part.as_str()))
        .and_then(|p| p.get_ref().as_table())
    else {
        return Err(OverrideError::UnknownPart {
            part: o.part.clone(),
            known: known(),
        });
    };
    let (last, tables) = o
        .field
        .split_last()
        .ok_or_else(|| OverrideError::Malformed(o.to_string()))?;
    for name in tables {
        table = table
            .get(name.as_str())
            .and_then(|v| v.get_ref().as_table())
            .ok_or_else(|| OverrideError::NoTable {
                part: o.part.clone(),
                table: name.clone(),
                field: last.clone(),
            })?;
    }
    if let Some(value) = table.get(last.as_str()) {
        if matches!(value.get_ref(), DeValue::Table(_) | DeValue::Array(_)) {
            return Err(OverrideError::NoTable {
                part: o.part.clone(),
                table: last.clone(),
                field: last.clone(),
            });
        }
        let span = value.span();
        return Ok(format!(
            "{}{}{}",
            &text[..span.start],
            as_toml(&o.value),
            &text[span.end..]
        ));
    }
    if !tables.is_empty() {
        return Err(OverrideError::CannotAdd {
            part: o.part.clone(),
            field: o.field.join("."),
        });
    }
    // Add the field after the part's table header.
    let header = format!("[part.{}]", o.part);
    let mut at = None;
    let mut offset = 0;
    for line in text.split_inclusive('\n') {
        if line.trim() == header {
            at = Some(offset + line.len());
            break;
        }
        offset += line.len();
    }
    let at = at.ok_or_else(|| OverrideError::CannotAdd {
        part: o.part.clone(),
        field: last.clone(),
    })?;
    let newline = if text[..at].ends_with('\n') { "" } else { "\n" };
    Ok(format!(
        "{}{newline}{last} = {}\n{}",
        &text[..at],
        as_toml(&o.value),
        &text[at..]
    ))
}

#[cfg(test)]
mod tests {
    use super::*;

    const TEXT: &str = "[part.v]\nkind = \"voltage-source\"\npins = [\"a\", \"gnd\"]\n\
                        sine = { rms = \"230V\", frequency = \"50Hz\" }\n\
                        [part.r]\nkind = \"resistor\"\npins = [\"a\", \"gnd\"]\nresistance = \"1k\"\n";

    #[test]
    fn overrides_replace_or_add_fields_as_if_written() {
        let set = |s: &str| parse_override(s).unwrap();
        let text = apply_overrides(
            TEXT,
            &[set("r.resistance=2k2"), set("v.sine.frequency=60Hz")],
        )
        .unwrap();
        assert!(text.contains("resistance = \"2k2\""), "{text}");
        assert!(text.contains("frequency = \"60Hz\""), "{text}");
        // Replaced in place: the lines keep their numbers.
        assert_eq!(text.lines().count(), TEXT.lines().count());
        let added = apply_overrides(TEXT, &[set("v.internal = x")]).unwrap();
        assert!(added.contains("[part.v]\ninternal = \"x\"\n"), "{added}");
    }

    #[test]
    fn bad_overrides_say_what_is_wrong() {
        assert!(matches!(
            parse_override("resistance=1k"),
            Err(OverrideError::Malformed(_))
        ));
        assert!(matches!(
            parse_override("r.=1k"),
            Err(OverrideError::Malformed(_))
        ));
        let e = apply_overrides(TEXT, &[parse_override("q.resistance=1").unwrap()]).unwrap_err();
        assert_eq!(e.to_string(), "no part `q` in the circuit (parts: v, r)");
        let e = apply_overrides(TEXT, &[parse_override("r.sine.rms=1").unwrap()]).unwrap_err();
        assert!(matches!(e, OverrideError::NoTable { .. }), "{e}");
    }
}
