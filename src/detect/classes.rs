//! Event classes: the IEEE 1159-2009 categories and the EN 50160:2010 dip and swell tables.

use super::*;

/// The IEEE 1159-2009 Table 2 category of an event. Durations: 0.5 to 30 cycles
/// instantaneous, 30 cycles to 3 s momentary, 3 s to 1 min temporary, beyond sustained (lower
/// bounds inclusive). A magnitude outside the category's range is noted.
pub fn ieee_1159(
    kind: DisturbanceKind,
    duration_s: f64,
    level_pct: f64,
    frequency_hz: f64,
) -> String {
    let cycles = duration_s * frequency_hz;
    let pu = level_pct / 100.0;
    let span = if cycles < 0.5 {
        return "shorter than half a cycle (not categorised)".into();
    } else if cycles < 30.0 {
        "instantaneous"
    } else if duration_s < 3.0 {
        "momentary"
    } else if duration_s < 60.0 {
        "temporary"
    } else {
        "sustained"
    };
    let (name, range) = match kind {
        DisturbanceKind::Interruption => {
            let name = if span == "instantaneous" {
                "momentary"
            } else {
                span
            };
            return format!("{name} interruption");
        }
        DisturbanceKind::Dip => match span {
            "sustained" => ("undervoltage", (0.8, 0.9)),
            s => (
                if s == "instantaneous" {
                    "instantaneous sag"
                } else if s == "momentary" {
                    "momentary sag"
                } else {
                    "temporary sag"
                },
                (0.1, 0.9),
            ),
        },
        DisturbanceKind::Swell => match span {
            "instantaneous" => ("instantaneous swell", (1.1, 1.8)),
            "momentary" => ("momentary swell", (1.1, 1.4)),
            "temporary" => ("temporary swell", (1.1, 1.2)),
            _ => ("overvoltage", (1.1, 1.2)),
        },
    };
    if pu < range.0 - 1e-9 || pu > range.1 + 1e-9 {
        format!(
            "{name} (magnitude {pu:.2} pu outside the category's {}-{} pu)",
            range.0, range.1
        )
    } else {
        name.to_string()
    }
}

/// The EN 50160:2010 dip or swell table cell of an event.
/// Dips: rows by residual u (A: 90 > u >= 80, B: 80 > u >= 70, C: 70 > u >= 40,
/// D: 40 > u >= 5, X: 5 > u), columns by duration t (1: 10 ms <= t <= 200 ms,
/// 2: <= 500 ms, 3: <= 1 s, 4: <= 5 s, 5: <= 60 s). Swells: rows S (u >= 120),
/// T (120 > u > 110), columns 1: 10 .. 500 ms, 2: <= 5 s, 3: <= 60 s.
pub fn en_50160(kind: DisturbanceKind, duration_s: f64, level_pct: f64) -> String {
    if duration_s < 0.010 {
        return "shorter than the table (10 ms)".into();
    }
    if duration_s > 60.0 {
        return "longer than the table (60 s)".into();
    }
    match kind {
        DisturbanceKind::Dip | DisturbanceKind::Interruption => {
            let row = if level_pct >= 90.0 {
                return "residual at or above 90% (not in the table)".into();
            } else if level_pct >= 80.0 {
                'A'
            } else if level_pct >= 70.0 {
                'B'
            } else if level_pct >= 40.0 {
                'C'
            } else if level_pct >= 5.0 {
                'D'
            } else {
                'X'
            };
            let column = [0.2, 0.5, 1.0, 5.0, 60.0]
                .iter()
                .position(|&limit| duration_s <= limit)
                .map_or(5, |i| i + 1);
            format!("{row}{column}")
        }
        DisturbanceKind::Swell => {
            let row = if level_pct >= 120.0 {
                'S'
            } else if level_pct > 110.0 {
                'T'
            } else {
                return "at or below 110% (not in the table)".into();
            };
            let column = [0.5, 5.0, 60.0]
                .iter()
                .position(|&limit| duration_s <= limit)
                .map_or(3, |i| i + 1);
            format!("{row}{column}")
        }
    }
}
