//! The built-in IEC 61000-4-11 tests and the resolution of a preset name or a compact spec.

use super::*;

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
            profile.phase_deg = crate::units::parse_phase_deg(p).ok_or_else(|| {
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
