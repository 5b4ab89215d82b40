//! The circuit file format: TOML read into a validated [`Circuit`].
//!
//! The file is read into TOML's spanned tree and walked by hand, so that every problem is
//! reported at once with its line, column and field, and the domain types stay free of
//! file concerns. The format is specified in `docs/circuit-format.md`.

use crate::circuit::{
    BipolarParams, Breakdown, Circuit, ComparatorParams, DiodeParams, MosfetParams, NodeId,
    ParameterSetInfo, Part, PartSpec, RegulatorParams, RelayParams, SwitchParams, TimerParams,
    Tolerance, TransformerParams, GROUND, THERMAL_VOLTAGE,
};
use crate::units::{parse_value, Quantity};
use crate::waveform::Waveform;
use std::collections::HashMap;
use std::fmt;
use std::ops::Range;
use toml::de::{DeTable, DeValue};
use toml::Spanned;

mod kinds;
mod overrides;
mod parts;
mod reader;
mod topology;
mod values;
pub use kinds::pin_names;
use kinds::*;
pub use overrides::{apply_overrides, parse_override, Override, OverrideError};
use reader::*;

/// One problem found in a circuit file.
#[derive(Clone, Debug, PartialEq)]
pub struct FileProblem {
    /// 1-based line.
    pub line: usize,
    /// 1-based column (in characters).
    pub column: usize,
    /// Dotted path of the offending field, e.g. `part.r_top.resistance`.
    pub field: String,
    /// What is wrong.
    pub message: String,
    /// The source line, for display.
    pub source_line: String,
    /// Length of the marked text on that line, in characters (at least 1).
    pub marker_len: usize,
}

/// Every problem found in one circuit file.
#[derive(Clone, Debug, PartialEq, thiserror::Error)]
pub struct CircuitFileError {
    /// The file's path as given.
    pub path: String,
    /// Problems in file order.
    pub problems: Vec<FileProblem>,
}

/// The most characters of a source line shown under an error.
const EXCERPT_CHARS: usize = 100;

/// A window of at most [`EXCERPT_CHARS`] characters of `line` around character `column`
/// (a file with one enormous line must not flood the terminal), and the column in it.
fn excerpt(line: &str, column: usize) -> (String, usize) {
    let chars: Vec<char> = line.chars().collect();
    if chars.len() <= EXCERPT_CHARS {
        return (line.to_string(), column);
    }
    let start = column
        .saturating_sub(EXCERPT_CHARS / 2)
        .min(chars.len() - EXCERPT_CHARS);
    let window: String = chars[start..start + EXCERPT_CHARS].iter().collect();
    let (before, after) = (start > 0, start + EXCERPT_CHARS < chars.len());
    let text = format!(
        "{}{window}{}",
        if before { "..." } else { "" },
        if after { "..." } else { "" }
    );
    (text, column - start + if before { 3 } else { 0 })
}

impl fmt::Display for CircuitFileError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let count = self.problems.len();
        writeln!(
            f,
            "{} has {} problem{}:",
            self.path,
            count,
            if count == 1 { "" } else { "s" }
        )?;
        for p in &self.problems {
            writeln!(
                f,
                "{}:{}:{}: {}: {}",
                self.path, p.line, p.column, p.field, p.message
            )?;
            let gutter = p.line.to_string().len();
            let (excerpt, column) = excerpt(&p.source_line, p.column.saturating_sub(1));
            let marker = p.marker_len.clamp(1, EXCERPT_CHARS);
            writeln!(f, "{:gutter$} |", "")?;
            writeln!(f, "{} | {excerpt}", p.line)?;
            writeln!(
                f,
                "{:gutter$} | {}{}",
                "",
                " ".repeat(column),
                "^".repeat(marker)
            )?;
        }
        Ok(())
    }
}

/// Reads and validates a circuit from TOML text; `path` names the file in messages.
///
/// ```
/// let text = r#"
/// title = "RC low-pass"
/// [part.supply]
/// kind = "voltage-source"
/// pins = ["in", "gnd"]
/// dc = "5V"
/// [part.r1]
/// kind = "resistor"
/// pins = ["in", "out"]
/// resistance = "1k"
/// [part.c1]
/// kind = "capacitor"
/// pins = ["out", "gnd"]
/// capacitance = "1u"
/// "#;
/// let circuit = sagtrip::circuit_file::parse_circuit(text, "rc.toml").unwrap();
/// assert_eq!(circuit.parts.len(), 3);
/// assert_eq!(circuit.nodes, ["gnd", "in", "out"]);
/// ```
pub fn parse_circuit(text: &str, path: &str) -> Result<Circuit, CircuitFileError> {
    parse_circuit_with(text, path, &HashMap::new())
}

/// As [`parse_circuit`], with some toleranced values replaced: `overrides` maps a field
/// (as in [`Tolerance::field`]) to the value to use. A field without a tolerance, or a
/// value outside its tolerance, is reported as a problem of the file.
pub fn parse_circuit_with(
    text: &str,
    path: &str,
    overrides: &HashMap<String, f64>,
) -> Result<Circuit, CircuitFileError> {
    let mut reader = Reader {
        text,
        problems: Vec::new(),
        tolerances: Vec::new(),
        overrides,
    };
    let circuit = match DeTable::parse(text) {
        Ok(doc) => reader.document(doc.get_ref()),
        Err(e) => {
            let span = e.span().unwrap_or(0..0);
            let message = e.message().trim().to_string();
            reader.problem(span, "(syntax)", message);
            None
        }
    };
    for field in overrides.keys() {
        if !reader.tolerances.iter().any(|t| &t.field == field) {
            reader.problem(0..0, field, "no value with a tolerance has this name");
        }
    }
    match circuit {
        Some(c) if reader.problems.is_empty() => Ok(c),
        _ => {
            let mut problems = reader.problems;
            problems.sort_by_key(|p| (p.line, p.column));
            Err(CircuitFileError {
                path: path.to_string(),
                problems,
            })
        }
    }
}

/// "a boolean", "an integer": a TOML type name with its article.
fn with_article(name: &str) -> String {
    let article = if name.starts_with(['a', 'e', 'i', 'o', 'u']) {
        "an"
    } else {
        "a"
    };
    format!("{article} {name}")
}
