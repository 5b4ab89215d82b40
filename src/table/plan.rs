//! Test plans: the default IEC 61000-4-11 class plan and plan files.

use super::*;

/// One test of a plan.
#[derive(Clone, Debug)]
pub struct PlanTest {
    /// Name in the table.
    pub name: String,
    /// Where the test comes from (a table of a standard, or the plan file).
    pub source: String,
    /// The event (its phase is replaced by each of the plan's phases).
    pub profile: Profile,
}

/// A test plan.
#[derive(Clone, Debug)]
pub struct Plan {
    /// What the plan is, for the report's heading.
    pub title: String,
    /// The tests in table order.
    pub tests: Vec<PlanTest>,
    /// Start phase angles, degrees.
    pub phases: Vec<f64>,
    /// Whether the static thresholds are part of the table.
    pub thresholds: bool,
    /// Residual levels (percent) at which to find the longest dip ridden through.
    pub ride_through_levels: Vec<f64>,
    /// How the static thresholds are searched.
    pub threshold_options: crate::thresholds::ThresholdOptions,
}

/// The residual levels of the default plan's longest ride-through: the IEC 61000-4-11
/// class 3 dip levels and 80% (from memory: 0%, 40%, 70% and 80%).
pub const DEFAULT_RIDE_THROUGH_LEVELS: [f64; 4] = [0.0, 40.0, 70.0, 80.0];

/// The durations the longest ride-through is sought between: half a cycle (seconds at
/// the supply frequency, set at run time) and this, seconds.
pub const RIDE_THROUGH_LONGEST_S: f64 = 10.0;

/// The swell levels and durations of the default plan (IEC 61000-4-11 sets no swell
/// levels; these bracket the over-voltage trip of a 230 V guard and follow the dip
/// durations).
pub const DEFAULT_SWELLS: [f64; 4] = [1.1, 1.2, 1.3, 1.5];

/// Durations of the default swells, cycles.
pub const DEFAULT_SWELL_CYCLES: [f64; 3] = [10.0, 25.0, 250.0];

/// The default start phase angles, degrees.
pub const DEFAULT_PHASES: [f64; 4] = [0.0, 90.0, 180.0, 270.0];

/// A class without preferred test levels in IEC 61000-4-11.
#[derive(Clone, Debug, PartialEq, thiserror::Error)]
#[error(
    "class {class}: the standard's preferred levels exist for classes 2 and 3 (class 1 and \
     class X are agreed case by case: give them as a plan file)"
)]
pub struct NoPreferredLevels {
    /// The class asked for.
    pub class: u8,
}

/// The default plan: the IEC 61000-4-11 preferred tests of `class` (2 or 3) at
/// `frequency_hz`, the default swells, the static thresholds, at 0, 90, 180 and 270 degrees.
pub fn default_plan(class: u8, frequency_hz: f64) -> Result<Plan, NoPreferredLevels> {
    if class != 2 && class != 3 {
        return Err(NoPreferredLevels { class });
    }
    let sixty = (frequency_hz - 60.0).abs() < 5.0;
    let mut tests: Vec<PlanTest> = iec_presets()
        .into_iter()
        .filter(|p| p.class == class)
        .map(|p| PlanTest {
            name: p.name.clone(),
            source: p.table.to_string(),
            profile: if sixty {
                p.profile_60hz
            } else {
                p.profile_50hz
            },
        })
        .collect();
    for level in DEFAULT_SWELLS {
        for cycles in DEFAULT_SWELL_CYCLES {
            tests.push(PlanTest {
                name: format!("swell-{:.0}-{cycles:.0}cyc", level * 100.0),
                source: "sagtrip default swell".into(),
                profile: Profile {
                    steps: vec![Step::Swell {
                        level,
                        duration: Duration::Cycles(cycles),
                    }],
                    phase_deg: 0.0,
                    edge_s: DEFAULT_EDGE_S,
                },
            });
        }
    }
    Ok(Plan {
        title: format!(
            "IEC 61000-4-11 class {class} preferred tests, swells and static thresholds"
        ),
        tests,
        phases: DEFAULT_PHASES.to_vec(),
        thresholds: true,
        ride_through_levels: DEFAULT_RIDE_THROUGH_LEVELS.to_vec(),
        threshold_options: crate::thresholds::ThresholdOptions::default(),
    })
}

/// A mistake in a plan file, with its place.
#[derive(Clone, Debug, PartialEq, thiserror::Error)]
#[error("{path}:{line}:{column}: {field}: {message}")]
pub struct PlanError {
    /// The file.
    pub path: String,
    /// Line, from 1.
    pub line: usize,
    /// Column, from 1.
    pub column: usize,
    /// The field, e.g. `test.2.event`.
    pub field: String,
    /// What is wrong.
    pub message: String,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct PlanFile {
    title: Option<String>,
    phases: Option<toml::Spanned<Vec<f64>>>,
    thresholds: Option<bool>,
    ride_through_levels: Option<toml::Spanned<Vec<f64>>>,
    #[serde(default)]
    test: Vec<PlanFileTest>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct PlanFileTest {
    name: toml::Spanned<String>,
    event: toml::Spanned<String>,
    source: Option<String>,
}

fn line_column(text: &str, offset: usize) -> (usize, usize) {
    let before = &text[..offset.min(text.len())];
    let line = before.matches('\n').count() + 1;
    let column = before
        .rfind('\n')
        .map_or(before.len(), |n| before.len() - n - 1)
        + 1;
    (line, column)
}

/// Reads a plan file (TOML): `title`, `phases`, `thresholds` and `[[test]]` tables with
/// `name`, `event` (a compact event or a preset name) and an optional `source`.
pub fn parse_plan(text: &str, path: &str, frequency_hz: f64) -> Result<Plan, PlanError> {
    let error = |offset: usize, field: &str, message: String| {
        let (line, column) = line_column(text, offset);
        PlanError {
            path: path.to_string(),
            line,
            column,
            field: field.to_string(),
            message,
        }
    };
    let file: PlanFile = toml::from_str(text).map_err(|e| {
        let offset = e.span().map_or(0, |s| s.start);
        error(offset, "plan", e.message().to_string())
    })?;
    let phases = match &file.phases {
        Some(p) => {
            let list = p.get_ref().clone();
            if list.is_empty() || list.iter().any(|x| !x.is_finite()) {
                return Err(error(
                    p.span().start,
                    "phases",
                    "give at least one finite angle in degrees, e.g. [0, 90, 180, 270]".into(),
                ));
            }
            list
        }
        None => DEFAULT_PHASES.to_vec(),
    };
    let ride_through_levels = match &file.ride_through_levels {
        Some(l) => {
            let list = l.get_ref().clone();
            if list.iter().any(|x| !(0.0..100.0).contains(x)) {
                return Err(error(
                    l.span().start,
                    "ride_through_levels",
                    "residual levels are percent from 0 to below 100, e.g. [0, 40, 70, 80]".into(),
                ));
            }
            list
        }
        None => DEFAULT_RIDE_THROUGH_LEVELS.to_vec(),
    };
    if file.test.is_empty() && !file.thresholds.unwrap_or(true) {
        return Err(error(
            0,
            "test",
            "the plan has no [[test]] and no thresholds: nothing to run".into(),
        ));
    }
    let mut tests = Vec::new();
    for (k, t) in file.test.iter().enumerate() {
        let field = format!("test.{}.event", k + 1);
        let profile = resolve(t.event.get_ref(), frequency_hz, DEFAULT_EDGE_S)
            .map_err(|e| error(t.event.span().start + 1 + e.at, &field, e.message.clone()))?;
        profile
            .check(frequency_hz)
            .map_err(|e| error(t.event.span().start, &field, e.to_string()))?;
        let name = t.name.get_ref().trim();
        if name.is_empty() {
            return Err(error(
                t.name.span().start,
                &format!("test.{}.name", k + 1),
                "a test needs a name".into(),
            ));
        }
        tests.push(PlanTest {
            name: name.to_string(),
            // A preset names its table of the standard; anything else the plan file.
            source: t.source.clone().unwrap_or_else(|| {
                let event = t.event.get_ref();
                let preset = event.split('@').next().unwrap_or("").trim();
                iec_presets()
                    .into_iter()
                    .find(|p| p.name == preset)
                    .map_or_else(|| path.to_string(), |p| p.table.to_string())
            }),
            profile,
        });
    }
    Ok(Plan {
        title: file.title.unwrap_or_else(|| path.to_string()),
        tests,
        phases,
        thresholds: file.thresholds.unwrap_or(true),
        ride_through_levels,
        threshold_options: crate::thresholds::ThresholdOptions::default(),
    })
}
