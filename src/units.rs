//! Reading and writing engineering values: numbers with SI prefixes and optional units.
//!
//! Circuit files and command-line options accept values such as `4.7u`, `68k`, `2.2M`,
//! `10mH`, `230V` or `50Hz`. The prefix letters are case-sensitive: `M` is mega and `m` is
//! milli. A unit, when written, must be the one the field expects (case-insensitive).

use std::fmt;

/// The physical quantity a field holds; it decides which unit suffix is accepted.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Quantity {
    /// Volts (`V`).
    Voltage,
    /// Amperes (`A`).
    Current,
    /// Ohms (`ohm` or `Ω`).
    Resistance,
    /// Farads (`F`).
    Capacitance,
    /// Henries (`H`).
    Inductance,
    /// Hertz (`Hz`).
    Frequency,
    /// Seconds (`s`).
    Time,
    /// Degrees of phase (`deg`).
    Angle,
    /// Siemens (`S`).
    Conductance,
    /// Amperes per volt squared (`A/V2`), for transistor transconductance factors.
    Transconductance,
    /// A plain number with no unit.
    Ratio,
    /// A yes/no setting, written as a TOML boolean.
    Flag,
    /// A whole count.
    Count,
}

impl Quantity {
    /// Unit suffixes accepted for this quantity, compared case-insensitively.
    pub fn units(self) -> &'static [&'static str] {
        match self {
            Quantity::Voltage => &["V"],
            Quantity::Current => &["A"],
            Quantity::Resistance => &["ohm", "ohms", "Ω"],
            Quantity::Capacitance => &["F"],
            Quantity::Inductance => &["H"],
            Quantity::Frequency => &["Hz"],
            Quantity::Time => &["s"],
            Quantity::Angle => &["deg"],
            Quantity::Conductance => &["S"],
            Quantity::Transconductance => &["A/V2", "A/V^2"],
            Quantity::Ratio | Quantity::Flag | Quantity::Count => &[],
        }
    }

    /// The unit written in reports and help texts.
    pub fn symbol(self) -> &'static str {
        match self {
            Quantity::Voltage => "V",
            Quantity::Current => "A",
            Quantity::Resistance => "ohm",
            Quantity::Capacitance => "F",
            Quantity::Inductance => "H",
            Quantity::Frequency => "Hz",
            Quantity::Time => "s",
            Quantity::Angle => "deg",
            Quantity::Conductance => "S",
            Quantity::Transconductance => "A/V2",
            Quantity::Ratio | Quantity::Flag | Quantity::Count => "",
        }
    }
}

/// Why a value could not be read.
#[derive(Clone, Debug, PartialEq, Eq, thiserror::Error)]
pub enum ValueError {
    /// The text does not start with a number.
    #[error("`{0}` is not a number (expected e.g. 4.7u, 68k, 2.2M or 10mH)")]
    NotANumber(String),
    /// The text after the number is neither an SI prefix nor the expected unit.
    #[error("`{text}`: unknown suffix `{suffix}` (SI prefixes: f p n u m k M G T; unit: {unit})")]
    UnknownSuffix {
        /// The whole value as written.
        text: String,
        /// The part that was not understood.
        suffix: String,
        /// The unit the field expects.
        unit: &'static str,
    },
    /// The number is NaN or infinite.
    #[error("`{0}` is not a finite number")]
    NotFinite(String),
}

fn prefix_factor(c: char) -> Option<f64> {
    Some(match c {
        'f' => 1e-15,
        'p' => 1e-12,
        'n' => 1e-9,
        'u' | 'µ' | 'μ' => 1e-6,
        'm' => 1e-3,
        'k' | 'K' => 1e3,
        'M' => 1e6,
        'G' => 1e9,
        'T' => 1e12,
        _ => return None,
    })
}

fn is_unit(text: &str, quantity: Quantity) -> bool {
    quantity
        .units()
        .iter()
        .any(|unit| unit.eq_ignore_ascii_case(text) || *unit == text)
}

/// A duration for people to read, to about four significant figures: `0.50 ms`,
/// `545.6 ms`, `2.282 s`, `81.5 s`.
pub fn format_duration(seconds: f64) -> String {
    let ms = seconds * 1e3;
    if !seconds.is_finite() {
        format!("{seconds} s")
    } else if ms.abs() < 10.0 {
        format!("{ms:.2} ms")
    } else if ms.abs() < 1000.0 {
        format!("{ms:.1} ms")
    } else if seconds.abs() < 10.0 {
        format!("{seconds:.3} s")
    } else {
        format!("{seconds:.1} s")
    }
}

/// Reads a value such as `4.7u`, `68k`, `10mH` or `230V`.
///
/// ```
/// use sagtrip::units::{parse_value, Quantity};
/// assert_eq!(parse_value("68k", Quantity::Resistance).unwrap(), 68e3);
/// assert!((parse_value("4.7uF", Quantity::Capacitance).unwrap() - 4.7e-6).abs() < 1e-18);
/// assert_eq!(parse_value("2.2M", Quantity::Resistance).unwrap(), 2.2e6);
/// assert_eq!(parse_value("10m", Quantity::Inductance).unwrap(), 10e-3);
/// ```
pub fn parse_value(text: &str, quantity: Quantity) -> Result<f64, ValueError> {
    let trimmed = text.trim();
    let number_end = number_prefix_len(trimmed);
    if number_end == 0 {
        return Err(ValueError::NotANumber(text.to_string()));
    }
    let number: f64 = trimmed[..number_end]
        .parse()
        .map_err(|_| ValueError::NotANumber(text.to_string()))?;
    let rest = trimmed[number_end..].trim_start();
    let factor = if rest.is_empty() || is_unit(rest, quantity) {
        1.0
    } else {
        let mut chars = rest.chars();
        let first = chars.next().unwrap_or(' ');
        let after = chars.as_str();
        match prefix_factor(first) {
            Some(f) if after.is_empty() || is_unit(after, quantity) => f,
            _ => {
                return Err(ValueError::UnknownSuffix {
                    text: text.to_string(),
                    suffix: rest.to_string(),
                    unit: if quantity.units().is_empty() {
                        "none"
                    } else {
                        quantity.symbol()
                    },
                })
            }
        }
    };
    let value = number * factor;
    if value.is_finite() {
        Ok(value)
    } else {
        Err(ValueError::NotFinite(text.to_string()))
    }
}

/// Length of the leading decimal number (sign, digits, point, exponent) in `s`.
fn number_prefix_len(s: &str) -> usize {
    let bytes = s.as_bytes();
    let mut i = 0;
    if i < bytes.len() && (bytes[i] == b'+' || bytes[i] == b'-') {
        i += 1;
    }
    let digits_start = i;
    while i < bytes.len() && (bytes[i].is_ascii_digit() || bytes[i] == b'.') {
        i += 1;
    }
    if i == digits_start {
        return 0;
    }
    // An exponent only when digits follow it, so `2e` stays a suffix error.
    if i < bytes.len() && (bytes[i] == b'e' || bytes[i] == b'E') {
        let mut j = i + 1;
        if j < bytes.len() && (bytes[j] == b'+' || bytes[j] == b'-') {
            j += 1;
        }
        let exp_digits = j;
        while j < bytes.len() && bytes[j].is_ascii_digit() {
            j += 1;
        }
        if j > exp_digits {
            i = j;
        }
    }
    i
}

/// `v` rounded to 9 significant digits, so that it prints in its shortest form without
/// binary noise (`11`, not `10.999999999999998`).
pub fn significant(v: f64) -> f64 {
    format!("{v:.8e}").parse().unwrap_or(v)
}

/// Reads a phase angle in degrees, the one grammar of every option, event spec and file:
/// a finite number, optionally followed by `deg` (`90`, `90deg`, `-45.5 deg`). `None` for
/// anything else.
///
/// ```
/// use sagtrip::units::parse_phase_deg;
/// assert_eq!(parse_phase_deg("90deg"), Some(90.0));
/// assert_eq!(parse_phase_deg(" 270 "), Some(270.0));
/// assert_eq!(parse_phase_deg("nan"), None);
/// ```
pub fn parse_phase_deg(text: &str) -> Option<f64> {
    text.trim()
        .trim_end_matches("deg")
        .trim()
        .parse::<f64>()
        .ok()
        .filter(|v| v.is_finite())
}

/// A value printed with an SI prefix and unit, e.g. `4.7 uF`, `68 kohm`.
pub struct Engineering(pub f64, pub Quantity);

impl fmt::Display for Engineering {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        const PREFIXES: [(f64, &str); 9] = [
            (1e12, "T"),
            (1e9, "G"),
            (1e6, "M"),
            (1e3, "k"),
            (1.0, ""),
            (1e-3, "m"),
            (1e-6, "u"),
            (1e-9, "n"),
            (1e-12, "p"),
        ];
        let Engineering(value, quantity) = *self;
        let unit = quantity.symbol();
        if value == 0.0 || !value.is_finite() {
            return write!(f, "{value} {unit}");
        }
        if value.abs() < 0.999_999_5e-15 {
            return write!(f, "{value:.3e} {unit}");
        }
        let magnitude = value.abs();
        let (scale, prefix) = PREFIXES
            .iter()
            .copied()
            .find(|(scale, _)| magnitude >= *scale * 0.999_999_5)
            .unwrap_or((1e-15, "f"));
        let scaled = value / scale;
        let text = format!("{scaled:.4}");
        let text = text.trim_end_matches('0').trim_end_matches('.');
        write!(f, "{text} {prefix}{unit}")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn durations_read_well() {
        assert_eq!(format_duration(0.0005), "0.50 ms");
        assert_eq!(format_duration(0.545_559_478_116_851_9), "545.6 ms");
        assert_eq!(format_duration(2.2816), "2.282 s");
        assert_eq!(format_duration(81.46), "81.5 s");
    }

    #[test]
    fn prefixes_and_units() {
        let cases = [
            ("4.7u", Quantity::Capacitance, 4.7e-6),
            ("68k", Quantity::Resistance, 68e3),
            ("2.2M", Quantity::Resistance, 2.2e6),
            ("10m", Quantity::Inductance, 10e-3),
            ("10mH", Quantity::Inductance, 10e-3),
            ("1F", Quantity::Capacitance, 1.0),
            ("230V", Quantity::Voltage, 230.0),
            ("230 V", Quantity::Voltage, 230.0),
            ("50Hz", Quantity::Frequency, 50.0),
            ("0.05ohm", Quantity::Resistance, 0.05),
            ("1e-14", Quantity::Current, 1e-14),
            ("5nA", Quantity::Current, 5e-9),
            ("-3.3", Quantity::Voltage, -3.3),
            ("1.5e3k", Quantity::Resistance, 1.5e6),
            ("100 kΩ", Quantity::Resistance, 100e3),
        ];
        for (text, quantity, expected) in cases {
            let got = parse_value(text, quantity).unwrap();
            assert!(
                (got - expected).abs() <= 1e-12 * expected.abs(),
                "{text}: {got} != {expected}"
            );
        }
    }

    #[test]
    fn rejects_garbage() {
        assert!(parse_value("abc", Quantity::Voltage).is_err());
        assert!(parse_value("4.7x", Quantity::Capacitance).is_err());
        assert!(parse_value("10mV", Quantity::Inductance).is_err());
        assert!(parse_value("", Quantity::Voltage).is_err());
        assert!(parse_value("1e999", Quantity::Voltage).is_err());
    }

    #[test]
    fn engineering_display() {
        assert_eq!(
            Engineering(4.7e-6, Quantity::Capacitance).to_string(),
            "4.7 uF"
        );
        assert_eq!(
            Engineering(68e3, Quantity::Resistance).to_string(),
            "68 kohm"
        );
        assert_eq!(
            Engineering(0.25, Quantity::Inductance).to_string(),
            "250 mH"
        );
    }
}
