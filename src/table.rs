//! The datasheet timing table: a test plan (by default the IEC 61000-4-11 preferred levels
//! of a class, swells and the static thresholds) run at several start phase angles, each
//! test summarised as its outcome and the spread of its timings.

use std::fmt::Write as _;

use rayon::prelude::*;
use serde::{Deserialize, Serialize};

use crate::circuit::Circuit;
use crate::profile::{iec_presets, resolve, Duration, Profile, Step, DEFAULT_EDGE_S};
use crate::scenario::{EventOptions, EventRun, ScenarioError, Settled};
use crate::thresholds::StaticThresholds;
use crate::tolerance::{Effect, Quantity};

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
        threshold_options: Default::default(),
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
        threshold_options: Default::default(),
    })
}

/// Smallest, typical and largest value of a timing over the runs where it exists. Typical
/// is the median (the mean of the middle two of an even count).
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct Spread {
    /// Smallest.
    pub min: f64,
    /// Median.
    pub typical: f64,
    /// Largest.
    pub max: f64,
}

impl Spread {
    /// The spread of `values`, or `None` if there are none.
    pub fn of(values: &[f64]) -> Option<Spread> {
        if values.is_empty() {
            return None;
        }
        let mut v = values.to_vec();
        v.sort_by(f64::total_cmp);
        let n = v.len();
        let typical = if n % 2 == 1 {
            v[n / 2]
        } else {
            0.5 * (v[n / 2 - 1] + v[n / 2])
        };
        Some(Spread {
            min: v[0],
            typical,
            max: v[n - 1],
        })
    }
}

/// One test's row.
#[derive(Clone, Debug, Serialize)]
pub struct Row {
    /// Test name.
    pub name: String,
    /// Where it comes from.
    pub source: String,
    /// The event, compact form.
    pub event: String,
    /// `rides through`, `trips`, `chatters`, or `trips in N of M runs, at` some phases.
    pub outcome: String,
    /// Phases at which it tripped, degrees.
    pub tripped_at_deg: Vec<f64>,
    /// Phases at which the load path chattered (opened or closed more than once per
    /// disturbance), degrees.
    pub chattered_at_deg: Vec<f64>,
    /// Onset to the load path opening, over the runs that tripped.
    pub trip_latency_ms: Option<Spread>,
    /// End of the event to the final reconnection.
    pub restore_latency_ms: Option<Spread>,
    /// First drop-out to the load path opening.
    pub release_time_ms: Option<Spread>,
    /// Last pick-up to the first making of the load path.
    pub operate_time_ms: Option<Spread>,
    /// Lowest logic-rail voltage over all runs, volts.
    pub min_rail_v: Option<f64>,
    /// Runs that tripped and had not reconnected the load when the restore limit ended
    /// them (their restore latency is unknown and left out of the spread).
    pub not_reconnected_runs: usize,
    /// The restore limit of the runs, seconds.
    pub restore_limit_s: f64,
}

/// The whole table.
#[derive(Clone, Debug, Serialize)]
pub struct Table {
    /// The circuit's title.
    pub circuit: String,
    /// The plan's title.
    pub plan: String,
    /// Nominal RMS voltage, volts.
    pub nominal_rms_v: f64,
    /// Nominal frequency, hertz.
    pub frequency_hz: f64,
    /// Start phase angles, degrees.
    pub phases_deg: Vec<f64>,
    /// One row per test.
    pub rows: Vec<Row>,
    /// The static thresholds, if the plan has them.
    pub thresholds: Option<StaticThresholds>,
    /// Simulated runs.
    pub runs: usize,
    /// The power-up limit: the load must have been connected by then, seconds.
    pub power_up_limit_s: f64,
    /// The limit on each run after its event's end, seconds.
    pub restore_limit_s: f64,
    /// The tolerance cases: how they were made (empty for the nominal circuit alone).
    pub tolerance_cases: String,
    /// The spread of the static thresholds over the tolerance cases.
    pub threshold_spread: Option<ThresholdSpread>,
    /// The screening of the toleranced values before the corners, largest effect first
    /// (empty when the corners were not screened).
    pub screening: Screening,
    /// The longest dip ridden through at every phase, at each of the plan's levels
    /// (nominal circuit), sought from half a cycle to `ride_through_longest_s`.
    pub longest_ride_through: Vec<crate::sweep::DurationBoundaryPoint>,
    /// The longest duration searched for the longest ride-through, seconds.
    pub ride_through_longest_s: f64,
    /// Anything the reader must know: cases that could not be simulated.
    pub notes: Vec<String>,
}

/// What a table keeps of one run: its phase and measurements (not its waveforms).
struct RunOutcome {
    phase: f64,
    measurements: crate::measure::Measurements,
    min_rail_v: Option<f64>,
    restore_limit_s: f64,
}

fn row(test: &PlanTest, runs: &[RunOutcome]) -> Row {
    let collect = |f: &dyn Fn(&crate::measure::Measurements) -> Option<f64>| -> Vec<f64> {
        runs.iter().filter_map(|r| f(&r.measurements)).collect()
    };
    // The phases (in plan order, once each) at which any case tripped or chattered.
    let phases_where = |f: &dyn Fn(&RunOutcome) -> bool| -> Vec<f64> {
        let mut out: Vec<f64> = Vec::new();
        for r in runs.iter().filter(|r| f(r)) {
            if !out.contains(&r.phase) {
                out.push(r.phase);
            }
        }
        out
    };
    let tripped_at = phases_where(&|r| r.measurements.tripped);
    let chattered_at = phases_where(&|r| r.measurements.chatter);
    let tripped_runs = runs.iter().filter(|r| r.measurements.tripped).count();
    let outcome = if !chattered_at.is_empty() {
        "chatters".to_string()
    } else if tripped_runs == runs.len() {
        "trips".to_string()
    } else if tripped_runs == 0 {
        "rides through".to_string()
    } else {
        let list: Vec<String> = tripped_at.iter().map(|p| format!("{p}°")).collect();
        format!(
            "trips in {tripped_runs} of {} runs, at {}",
            runs.len(),
            list.join(", ")
        )
    };
    Row {
        name: test.name.clone(),
        source: test.source.clone(),
        event: test.profile.spec(),
        outcome,
        tripped_at_deg: tripped_at,
        chattered_at_deg: chattered_at,
        trip_latency_ms: Spread::of(&collect(&|m| m.trip_latency_ms)),
        restore_latency_ms: Spread::of(&collect(&|m| m.restore_latency_ms)),
        release_time_ms: Spread::of(&collect(&|m| m.release_time_ms)),
        operate_time_ms: Spread::of(&collect(&|m| m.operate_time_ms)),
        min_rail_v: runs.iter().filter_map(|r| r.min_rail_v).reduce(f64::min),
        not_reconnected_runs: runs
            .iter()
            .filter(|r| r.measurements.tripped && !r.measurements.load_connected_at_end)
            .count(),
        restore_limit_s: runs.iter().map(|r| r.restore_limit_s).fold(0.0, f64::max),
    }
}

/// Runs every test of `plan` at every phase, in parallel from the settled protector;
/// `done` is called after each run (for a progress display).
pub fn run_tests(
    settled: &Settled,
    circuit: &Circuit,
    plan: &Plan,
    done: &(dyn Fn() + Sync),
) -> Result<Vec<Row>, TableError> {
    run_cases(&[(settled, circuit)], plan, done)
}

/// Runs every test of `plan` at every phase for every tolerance case (each case a settled
/// protector and its circuit), all in parallel; each row's spreads cover every phase and
/// case. A test at some phases trips "at" those phases if it trips there in any case.
pub fn run_cases(
    cases: &[(&Settled, &Circuit)],
    plan: &Plan,
    done: &(dyn Fn() + Sync),
) -> Result<Vec<Row>, TableError> {
    let mut jobs: Vec<(usize, usize, f64)> = Vec::new();
    for t in 0..plan.tests.len() {
        for c in 0..cases.len() {
            for &p in &plan.phases {
                jobs.push((t, c, p));
            }
        }
    }
    let results: Vec<Result<RunOutcome, TableError>> = jobs
        .par_iter()
        .map(|&(t, c, phase)| {
            let test = &plan.tests[t];
            let mut profile = test.profile.clone();
            profile.phase_deg = phase;
            let (settled, circuit) = cases[c];
            let run = settled
                .run(circuit, &profile)
                .map(|r: EventRun| RunOutcome {
                    phase,
                    measurements: r.measurements,
                    min_rail_v: r.min_rail_v,
                    restore_limit_s: r.restore_limit_s,
                })
                .map_err(|e: ScenarioError| TableError::Test {
                    test: test.name.clone(),
                    phase_deg: phase,
                    case: c + 1,
                    source: e,
                });
            done();
            run
        })
        .collect();
    let per_test = cases.len() * plan.phases.len();
    let mut runs = results.into_iter();
    let mut rows = Vec::with_capacity(plan.tests.len());
    for test in &plan.tests {
        let mine: Vec<RunOutcome> = runs.by_ref().take(per_test).collect::<Result<_, _>>()?;
        rows.push(row(test, &mine));
    }
    Ok(rows)
}

/// A latency whose changes add up to less than this is as good as constant for
/// screening, milliseconds (a tenth of a millisecond is the engine's agreement with
/// independent checks; half a millisecond leaves room for the run-to-run grain).
pub const LATENCY_FLOOR_MS: f64 = 0.5;

/// The quantities a screening case is judged by: each test's typical trip and restore
/// latency (floor [`LATENCY_FLOOR_MS`]) and the four static thresholds (floor twice the
/// search's resolution). [`crate::tolerance::rank`] puts them on one scale.
pub fn screening_quantities(rows: &[Row], thresholds: Option<&StaticThresholds>) -> Vec<Quantity> {
    let mut out = Vec::new();
    for r in rows {
        for (what, spread) in [
            ("trip latency", r.trip_latency_ms),
            ("restore latency", r.restore_latency_ms),
        ] {
            out.push(Quantity {
                name: format!("{what} of {}", r.name),
                value: spread.map(|s| s.typical),
                floor: LATENCY_FLOOR_MS,
            });
        }
    }
    if let Some(t) = thresholds {
        for (name, th) in [
            ("under-voltage trip", t.under.trip),
            ("under-voltage reset", t.under.reset),
            ("over-voltage trip", t.over.trip),
            ("over-voltage reset", t.over.reset),
        ] {
            out.push(Quantity {
                name: name.into(),
                value: th.map(|x| x.volts),
                floor: 2.0 * t.resolution_v,
            });
        }
    }
    out
}

/// Screens the toleranced values of a circuit file: with each value alone at each of its
/// limits, the others as written, runs the plan's tests at its first phase and, if the
/// plan has them, the static thresholds; the values are ranked by the largest change they cause in any of
/// [`screening_quantities`], and the first `keep` marked kept. `done` is called after each
/// simulated run or threshold search.
pub fn screen_values(
    source: Source<'_>,
    options: &EventOptions,
    plan: &Plan,
    keep: usize,
    done: &(dyn Fn() + Sync),
) -> Result<Screening, TableError> {
    let circuit = source.circuit;
    let mut first_phase = plan.clone();
    first_phase.phases.truncate(1);
    let cases = crate::tolerance::one_at_a_time(&circuit.tolerances);
    let measured: Vec<Vec<Quantity>> = cases
        .par_iter()
        .map(|case| {
            let (c, s) = settle_case(source, options, case)?;
            let rows = run_cases(&[(&s, &c)], &first_phase, done)?;
            let thresholds = if plan.thresholds {
                // A failed search leaves the thresholds missing: their change counts fully.
                let found = crate::thresholds::find(&s, &c, &plan.threshold_options).ok();
                done();
                found
            } else {
                None
            };
            Ok(screening_quantities(&rows, thresholds.as_ref()))
        })
        .collect::<Result<_, TableError>>()?;
    let effects = crate::tolerance::rank(&circuit.tolerances, &measured, keep);
    let held: Vec<bool> = circuit
        .tolerances
        .iter()
        .map(|t| effects.iter().any(|e| e.field == t.field && !e.kept))
        .collect();
    let allowance = crate::tolerance::held_allowance(&circuit.tolerances, &measured, &held)
        .into_iter()
        .filter(|(_, a)| *a > 0.0)
        .collect();
    Ok(Screening { effects, allowance })
}

/// What screening found: the ranked values, and what the values held as written could
/// add to each quantity's spread (see [`crate::tolerance::held_allowance`]).
#[derive(Clone, Debug, Default, Serialize)]
pub struct Screening {
    /// The values, largest effect first.
    pub effects: Vec<Effect>,
    /// Per quantity (name, amount in its unit): how far each side of its spread over the
    /// corners may fall short because the held values stay as written. Only non-zero
    /// amounts.
    pub allowance: Vec<(String, f64)>,
}

/// The circuit of one tolerance case, powered up and settled.
fn settle_case(
    source: Source<'_>,
    options: &EventOptions,
    case: &crate::tolerance::Case,
) -> Result<(Circuit, Settled), TableError> {
    let c = crate::circuit_file::parse_circuit_with(source.text, source.path, &case.values)
        .map_err(|e| TableError::CaseFile {
            case: case.label.clone(),
            source: Box::new(e),
        })?;
    let s = crate::scenario::settle(&c, options).map_err(|e| TableError::CaseSettle {
        path: source.path.to_string(),
        case: case.label.clone(),
        source: e,
    })?;
    Ok((c, s))
}

/// Which tolerance cases a table runs besides the nominal circuit.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Cases {
    /// The nominal circuit alone.
    Nominal,
    /// Every corner; with `screen: Some(k)` (or more than
    /// [`crate::tolerance::MAX_CORNER_VALUES`] values) only the `k` values screening finds
    /// most influential are varied.
    Corners {
        /// How many values the corners vary after screening.
        screen: Option<usize>,
    },
    /// Seeded Monte Carlo samples.
    MonteCarlo {
        /// Samples besides the nominal case.
        count: usize,
        /// The generator's seed.
        seed: u64,
    },
}

/// Reports a table's progress: stages of simulated runs, and each run as it finishes
/// (from worker threads).
pub trait Progress: Sync {
    /// A stage begins: `name` (empty for the table itself) of `runs` runs or searches.
    fn stage(&self, name: &str, runs: usize);
    /// One run or threshold search finished.
    fn done(&self);
}

/// Progress reporting that shows nothing.
impl Progress for () {
    fn stage(&self, _: &str, _: usize) {}
    fn done(&self) {}
}

/// The circuit a table runs on: its file's text, where it came from (for messages and
/// tolerance cases) and its parsed form.
#[derive(Clone, Copy, Debug)]
pub struct Source<'a> {
    /// The circuit file's text.
    pub text: &'a str,
    /// Its name in messages.
    pub path: &'a str,
    /// The parsed circuit (nominal values).
    pub circuit: &'a Circuit,
}

/// Which tolerance cases a table was asked to run.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum CaseKind {
    /// Every corner.
    Corners,
    /// Monte Carlo samples.
    MonteCarlo,
}

/// Why a table could not be built.
#[derive(Clone, Debug, PartialEq, thiserror::Error)]
pub enum TableError {
    /// Tolerance cases asked of a circuit without tolerances.
    #[error("{path} has no values with a tolerance (docs/circuit-format.md)")]
    NoTolerances {
        /// What was asked.
        kind: CaseKind,
        /// The circuit.
        path: String,
    },
    /// A screening count out of range.
    #[error(
        "keep from 1 to {} values for the corners, not {keep}",
        crate::tolerance::MAX_CORNER_VALUES
    )]
    ScreenOutOfRange {
        /// The count asked.
        keep: usize,
    },
    /// Too many values for corners.
    #[error(transparent)]
    TooManyCorners(crate::tolerance::TooManyCorners),
    /// The nominal circuit did not power up to its operating state.
    #[error("{0}: {1}")]
    Settle(String, crate::scenario::ScenarioError),
    /// A test run failed.
    #[error("test {test} at {phase_deg}° (case {case}): {source}")]
    Test {
        /// The test's name.
        test: String,
        /// The start phase, degrees.
        phase_deg: f64,
        /// The tolerance case, from 1 (the nominal circuit).
        case: usize,
        /// Why.
        source: ScenarioError,
    },
    /// A tolerance case's values do not make a valid circuit.
    #[error("{case}: {source}")]
    CaseFile {
        /// The case's label.
        case: String,
        /// The file's problems with those values.
        source: Box<crate::circuit_file::CircuitFileError>,
    },
    /// A tolerance case did not power up to its operating state.
    #[error("{path} ({case}): {source}")]
    CaseSettle {
        /// The circuit file.
        path: String,
        /// The case's label.
        case: String,
        /// Why.
        source: ScenarioError,
    },
    /// The nominal circuit's static thresholds could not be found.
    #[error("{path}: thresholds: {source}")]
    Thresholds {
        /// The circuit file.
        path: String,
        /// Why.
        source: ScenarioError,
    },
    /// A longest ride-through search met a point that failed.
    #[error("{path}: longest ride-through: {source}")]
    RideThrough {
        /// The circuit file.
        path: String,
        /// The point that failed.
        source: crate::sweep::PointFailed,
    },
}

/// Builds the whole table: settles the protector (and every tolerance case), screens the
/// tolerances where asked, finds the static thresholds of every case and runs every test
/// at every phase for every case. Returns the table and the settled nominal protector
/// (for further runs, such as a report's trip map).
///
/// A threshold search that fails for a tolerance case is reported in the table's notes and
/// that case left out of the threshold spread; any other failure stops the table.
pub fn build(
    source: Source<'_>,
    options: &EventOptions,
    plan: &Plan,
    cases: Cases,
    progress: &dyn Progress,
) -> Result<(Table, Settled), TableError> {
    use crate::tolerance::{self, MAX_CORNER_VALUES};
    let Source { path, circuit, .. } = source;
    // Mistakes in the request first, before any simulation.
    let n_values = circuit.tolerances.len();
    let asked = match cases {
        Cases::Nominal => None,
        Cases::Corners { .. } => Some(CaseKind::Corners),
        Cases::MonteCarlo { .. } => Some(CaseKind::MonteCarlo),
    };
    if let (Some(kind), 0) = (asked, n_values) {
        return Err(TableError::NoTolerances {
            kind,
            path: path.to_string(),
        });
    }
    if let Cases::Corners { screen: Some(k) } = cases {
        if k == 0 || k > MAX_CORNER_VALUES {
            return Err(TableError::ScreenOutOfRange { keep: k });
        }
    }
    let settled = crate::scenario::settle(circuit, options)
        .map_err(|e| TableError::Settle(path.to_string(), e))?;
    let mut screening = Screening::default();
    let (cases, description) = match cases {
        Cases::Nominal => (vec![tolerance::nominal()], String::new()),
        Cases::Corners { screen } => {
            let keep = screen.unwrap_or(MAX_CORNER_VALUES).min(n_values);
            if keep < n_values {
                let per_case = plan.tests.len() + usize::from(plan.thresholds);
                progress.stage("screening", 2 * n_values * per_case);
                screening = screen_values(source, options, plan, keep, &|| progress.done())?;
                let kept: Vec<usize> = circuit
                    .tolerances
                    .iter()
                    .enumerate()
                    .filter(|(_, t)| {
                        screening
                            .effects
                            .iter()
                            .any(|e| e.kept && e.field == t.field)
                    })
                    .map(|(i, _)| i)
                    .collect();
                let cases = tolerance::corners_of(&circuit.tolerances, &kept)
                    .map_err(TableError::TooManyCorners)?;
                let description = format!(
                    "{} tolerance cases (nominal and every corner of the {keep} value{} kept \
                     by screening all {n_values}; the others as written)",
                    cases.len(),
                    if keep == 1 { "" } else { "s" }
                );
                (cases, description)
            } else {
                let cases =
                    tolerance::corners(&circuit.tolerances).map_err(TableError::TooManyCorners)?;
                let description = format!(
                    "{} tolerance cases (nominal and every corner of {n_values} values)",
                    cases.len()
                );
                (cases, description)
            }
        }
        Cases::MonteCarlo { count, seed } => {
            let cases = tolerance::monte_carlo(&circuit.tolerances, count, seed);
            let description = format!(
                "{} tolerance cases (nominal and {count} Monte Carlo samples of {n_values} \
                 values, uniform between their limits, seed {seed})",
                cases.len()
            );
            (cases, description)
        }
    };
    let extra: Vec<(Circuit, Settled)> = cases[1..]
        .par_iter()
        .map(|case| settle_case(source, options, case))
        .collect::<Result<_, TableError>>()?;
    let mut case_refs: Vec<(&Settled, &Circuit)> = vec![(&settled, circuit)];
    case_refs.extend(extra.iter().map(|(c, s)| (s, c)));
    let runs = plan.tests.len() * plan.phases.len() * case_refs.len();
    progress.stage("", runs + usize::from(plan.thresholds) * case_refs.len());
    // The static thresholds of every case (the nominal first); the table shows the
    // nominal case's and the spread over all.
    let mut notes: Vec<String> = Vec::new();
    let mut all_thresholds: Vec<StaticThresholds> = Vec::new();
    if plan.thresholds {
        for (k, (s, c)) in case_refs.iter().enumerate() {
            let found = crate::thresholds::find(s, c, &plan.threshold_options);
            progress.done();
            match found {
                Ok(t) => all_thresholds.push(t),
                Err(e) if k == 0 => {
                    return Err(TableError::Thresholds {
                        path: path.to_string(),
                        source: e,
                    })
                }
                Err(e) => notes.push(format!(
                    "{}: the static thresholds could not be found ({e}); this case is left \
                     out of the threshold spread",
                    cases[k].label
                )),
            }
        }
    }
    let rows = run_cases(&case_refs, plan, &|| progress.done())?;
    let threshold_spread = (all_thresholds.len() > 1).then(|| ThresholdSpread::of(&all_thresholds));
    // The longest ride-through per level, on the nominal circuit; the plan's own dips at
    // those levels narrow the first bracket (only without tolerance cases, whose rows mix
    // circuits).
    let known: Vec<crate::sweep::Cell> = if case_refs.len() == 1 {
        known_cells(plan, &rows, settled.frequency_hz)
    } else {
        Vec::new()
    };
    progress.stage("longest ride-through", plan.ride_through_levels.len());
    let range = (0.5 / settled.frequency_hz, RIDE_THROUGH_LONGEST_S);
    let longest_ride_through = plan
        .ride_through_levels
        .iter()
        .map(|&level| {
            let b = crate::sweep::refine_duration_boundary(
                &settled,
                circuit,
                level,
                &plan.phases,
                range,
                &known,
                DEFAULT_EDGE_S,
            );
            progress.done();
            b.map_err(|e| TableError::RideThrough {
                path: path.to_string(),
                source: e,
            })
        })
        .collect::<Result<Vec<_>, TableError>>()?;
    let table = Table {
        circuit: circuit.title.clone(),
        plan: plan.title.clone(),
        nominal_rms_v: settled.rms,
        frequency_hz: settled.frequency_hz,
        phases_deg: plan.phases.clone(),
        rows,
        thresholds: all_thresholds.into_iter().next(),
        runs,
        power_up_limit_s: settled.settle_limit_s,
        restore_limit_s: settled.restore_limit_s,
        tolerance_cases: description,
        threshold_spread,
        screening,
        longest_ride_through,
        ride_through_longest_s: RIDE_THROUGH_LONGEST_S,
        notes,
    };
    Ok((table, settled))
}

/// The plan's one-step dips as map cells (worst case over the phases), for the longest
/// ride-through search.
fn known_cells(plan: &Plan, rows: &[Row], frequency_hz: f64) -> Vec<crate::sweep::Cell> {
    use crate::sweep::{Cell, Outcome};
    plan.tests
        .iter()
        .zip(rows)
        .filter_map(|(t, r)| match t.profile.steps.as_slice() {
            [Step::Dip { residual, duration }] => Some(Cell {
                level_pct: residual * 100.0,
                duration_s: duration.seconds(frequency_hz),
                outcome: if !r.chattered_at_deg.is_empty() {
                    Outcome::Chatters
                } else if r.tripped_at_deg.is_empty() {
                    Outcome::RidesThrough
                } else {
                    Outcome::Trips
                },
                trip_latency_ms: None,
                restore_latency_ms: None,
            }),
            _ => None,
        })
        .collect()
}

/// The longest ride-through as rows: level, longest ridden through, shortest trip.
fn ride_through_rows(table: &Table) -> Vec<[String; 3]> {
    use crate::sweep::DurationSearch;
    use crate::units::format_duration;
    table
        .longest_ride_through
        .iter()
        .map(|b| {
            let (ride, trip) = match (b.status, b.longest_ride_through_s, b.shortest_trip_s) {
                (DurationSearch::Found, Some(r), Some(t)) => {
                    (format_duration(r), format_duration(t))
                }
                (DurationSearch::RidesThroughAll, Some(r), _) => (
                    format!("at least {}", format_duration(r)),
                    "none searched".into(),
                ),
                (_, _, Some(t)) => ("none".into(), format!("{} or less", format_duration(t))),
                _ => ("-".into(), "-".into()),
            };
            [format!("{}%", b.level_pct), ride, trip]
        })
        .collect()
}

/// What the longest ride-through section shows.
fn ride_through_text(table: &Table) -> String {
    format!(
        "The longest dip ridden through at every start phase, at each residual level (nominal circuit): found by bisection in duration from half a cycle to {}, to 1% of the duration or 0.5 ms, whichever is larger. The value given was simulated and rode through; the next column is the shortest duration found to trip.",
        crate::units::format_duration(table.ride_through_longest_s)
    )
}

/// The spread of the static thresholds over tolerance cases, volts.
#[derive(Clone, Debug, Serialize)]
pub struct ThresholdSpread {
    /// Cases whose thresholds were found.
    pub cases: usize,
    /// Under-voltage trip.
    pub under_trip_v: Option<Spread>,
    /// Under-voltage reset.
    pub under_reset_v: Option<Spread>,
    /// Over-voltage trip.
    pub over_trip_v: Option<Spread>,
    /// Over-voltage reset.
    pub over_reset_v: Option<Spread>,
}

impl ThresholdSpread {
    /// The spread of each threshold over `all` (one per case).
    pub fn of(all: &[StaticThresholds]) -> ThresholdSpread {
        let get = |f: &dyn Fn(&StaticThresholds) -> Option<crate::thresholds::Threshold>| {
            let v: Vec<f64> = all.iter().filter_map(|t| f(t).map(|x| x.volts)).collect();
            Spread::of(&v)
        };
        ThresholdSpread {
            cases: all.len(),
            under_trip_v: get(&|t| t.under.trip),
            under_reset_v: get(&|t| t.under.reset),
            over_trip_v: get(&|t| t.over.trip),
            over_reset_v: get(&|t| t.over.reset),
        }
    }
}

/// A timing spread as `min / typical / max` in ms (0.1 ms), or `-`.
fn spread_cell(s: Option<Spread>) -> String {
    match s {
        Some(s) => format!("{:.1} / {:.1} / {:.1}", s.min, s.typical, s.max),
        None => "-".to_string(),
    }
}

/// The restore latency cell: the spread over the runs that reconnected, and how many runs
/// had not reconnected within the restore limit (never a latency that was not seen).
fn restore_cell(r: &Row) -> String {
    let limit = format!("not reconnected within {} s", r.restore_limit_s);
    match (r.not_reconnected_runs, r.restore_latency_ms) {
        (0, s) => spread_cell(s),
        (_, None) => limit,
        (n, s) => format!("{}; {limit} in {n} runs", spread_cell(s)),
    }
}

/// The four timing cells of a row: trip, restore, release, operate.
fn timing_cells(r: &Row) -> [String; 4] {
    [
        spread_cell(r.trip_latency_ms),
        restore_cell(r),
        spread_cell(r.release_time_ms),
        spread_cell(r.operate_time_ms),
    ]
}

/// The static thresholds as rows: side, trip, reset, hysteresis, what the slow ramp showed.
fn threshold_rows(t: &StaticThresholds) -> Vec<[String; 5]> {
    let volts = |x: Option<crate::thresholds::Threshold>| {
        x.map_or("-".to_string(), |x| {
            format!("{:.1} V ({:.1}%)", x.volts, x.percent)
        })
    };
    [&t.under, &t.over]
        .into_iter()
        .map(|s| {
            let ramp = s
                .ramp
                .as_ref()
                .map_or("-".to_string(), crate::thresholds::Ramp::verdict);
            [
                match s.side {
                    crate::thresholds::Side::Under => "under-voltage",
                    crate::thresholds::Side::Over => "over-voltage",
                }
                .to_string(),
                volts(s.trip),
                volts(s.reset),
                s.hysteresis_v
                    .map_or("-".to_string(), |h| format!("{h:.1} V")),
                ramp,
            ]
        })
        .collect()
}

/// The sentence under the heading: plan, supply, phases, cases, runs.
fn summary_sentence(table: &Table) -> String {
    let phases: Vec<String> = table.phases_deg.iter().map(|p| format!("{p}°")).collect();
    let (cases, over) = if table.tolerance_cases.is_empty() {
        (String::new(), "the phases")
    } else {
        (
            format!(" and {}", table.tolerance_cases),
            "the phases and tolerance cases",
        )
    };
    format!(
        "{} on a {:.0} V {:.0} Hz supply; each test at {} start phase{cases}; {} simulated \
         runs. Times in ms as min / typical / max over {over} (typical: the median). \
         Power-up limit {}, restore limit {} after each event.",
        table.plan,
        table.nominal_rms_v,
        table.frequency_hz,
        phases.join(", "),
        table.runs,
        crate::units::format_duration(table.power_up_limit_s),
        crate::units::format_duration(table.restore_limit_s)
    )
}

/// The threshold spread as rows: threshold, min, typical, max (volts).
fn spread_rows(t: &ThresholdSpread) -> Vec<[String; 4]> {
    [
        ("under-voltage trip", t.under_trip_v),
        ("under-voltage reset", t.under_reset_v),
        ("over-voltage trip", t.over_trip_v),
        ("over-voltage reset", t.over_reset_v),
    ]
    .into_iter()
    .map(|(name, s)| match s {
        Some(s) => [
            name.to_string(),
            format!("{:.1} V", s.min),
            format!("{:.1} V", s.typical),
            format!("{:.1} V", s.max),
        ],
        None => [name.to_string(), "-".into(), "-".into(), "-".into()],
    })
    .collect()
}

/// The table as Markdown: readable in a terminal, pasteable into a datasheet.
pub fn markdown(table: &Table) -> String {
    let mut out = String::new();
    let _ = writeln!(out, "# {}\n", table.circuit);
    let _ = writeln!(out, "{}\n", summary_sentence(table));
    let _ = writeln!(
        out,
        "| test | source | event | outcome | trip latency | restore latency | release time | operate time |"
    );
    let _ = writeln!(out, "|---|---|---|---|---|---|---|---|");
    for r in &table.rows {
        let [trip, restore, release, operate] = timing_cells(r);
        let _ = writeln!(
            out,
            "| {} | {} | `{}` | {} | {trip} | {restore} | {release} | {operate} |",
            r.name, r.source, r.event, r.outcome
        );
    }
    if let Some(t) = &table.thresholds {
        let _ = writeln!(
            out,
            "\n## Static thresholds\n\nEach level held {} s, found by bisection to {} V.\n",
            t.hold_s, t.resolution_v
        );
        let _ = writeln!(out, "| side | trip | reset | hysteresis | slow ramp |");
        let _ = writeln!(out, "|---|---|---|---|---|");
        for [side, trip, reset, hysteresis, ramp] in threshold_rows(t) {
            let _ = writeln!(out, "| {side} | {trip} | {reset} | {hysteresis} | {ramp} |");
        }
        for s in [&t.under, &t.over] {
            if let Some(note) = &s.note {
                let _ = writeln!(out, "\n{note}");
            }
        }
    }
    if !table.longest_ride_through.is_empty() {
        let _ = writeln!(
            out,
            "\n## Longest ride-through\n\n{}\n",
            ride_through_text(table)
        );
        let _ = writeln!(out, "| residual | longest ridden through | shortest trip |");
        let _ = writeln!(out, "|---|---|---|");
        for [level, ride, trip] in ride_through_rows(table) {
            let _ = writeln!(out, "| {level} | {ride} | {trip} |");
        }
    }
    if let Some(spread) = &table.threshold_spread {
        let _ = writeln!(
            out,
            "\nOver the {} tolerance cases (the table above is the nominal case):\n",
            spread.cases
        );
        let _ = writeln!(out, "| threshold | min | typical | max |");
        let _ = writeln!(out, "|---|---|---|---|");
        for [name, lo, typ, hi] in spread_rows(spread) {
            let _ = writeln!(out, "| {name} | {lo} | {typ} | {hi} |");
        }
    }
    if !table.screening.effects.is_empty() {
        let _ = writeln!(out, "\n## Tolerance screening\n\n{SCREENING_TEXT}\n");
        let _ = writeln!(out, "| value | share of a spread | change | in | corners |");
        let _ = writeln!(out, "|---|---|---|---|---|");
        for [field, percent, change, quantity, kept] in screening_rows(&table.screening.effects) {
            let _ = writeln!(
                out,
                "| `{field}` | {percent} | {change} | {quantity} | {kept} |"
            );
        }
        if let Some(text) = allowance_text(&table.screening) {
            let _ = writeln!(out, "\n{text}");
        }
    }
    for note in &table.notes {
        let _ = writeln!(out, "\nNote: {note}");
    }
    let _ = writeln!(out, "\n{}", crate::CAUTION);
    out
}

/// What the screening table shows.
const SCREENING_TEXT: &str = "Each value alone at its lower and at its upper limit, the others \
     as written, at the first start phase. For every reported figure (each test's typical \
     trip and restore latency, each static threshold) the changes of all values add up to \
     an estimate of the figure's spread over the corners; a value's share of a spread is its \
     change as a percentage of that sum, so thresholds in volts and latencies in \
     milliseconds rank on one scale. Each value ranks by its largest share (100% where one \
     limit trips and the other does not); figures whose changes add up to less than 0.5 ms \
     or twice the threshold resolution do not rank. The corners vary the values kept and \
     leave the others as written.";

/// The unit of a screening quantity, from its name.
fn quantity_unit(name: &str) -> &'static str {
    if name.contains("latency") {
        "ms"
    } else {
        "V"
    }
}

/// What the values held as written could add to the spreads, as a sentence.
fn allowance_text(screening: &Screening) -> Option<String> {
    if screening.allowance.is_empty() {
        return None;
    }
    let items: Vec<String> = screening
        .allowance
        .iter()
        .map(|(name, a)| {
            if a.is_finite() {
                format!("{name} {a:.2} {}", quantity_unit(name))
            } else {
                format!("{name} (a held value decides whether it trips)")
            }
        })
        .collect();
    Some(format!(
        "The values held as written could widen each side of these spreads by up to (half \
         the sum of their changes, first order): {}.",
        items.join("; ")
    ))
}

/// The screening as rows: field, share, change, quantity, kept.
fn screening_rows(effects: &[Effect]) -> Vec<[String; 5]> {
    effects
        .iter()
        .map(|e| {
            [
                e.field.clone(),
                format!("{:.1}%", e.percent),
                if e.quantity.is_empty() {
                    "-".into()
                } else if e.change.is_finite() {
                    format!("{:.2} {}", e.change, quantity_unit(&e.quantity))
                } else {
                    "trips at one limit only".into()
                },
                if e.quantity.is_empty() {
                    "-".into()
                } else {
                    e.quantity.clone()
                },
                if e.kept { "varied" } else { "as written" }.into(),
            ]
        })
        .collect()
}

/// The table as CSV: one line per test, the spreads in three columns each.
pub fn csv(table: &Table) -> String {
    let mut out = String::from(
        "test,source,event,outcome,trip_min_ms,trip_typical_ms,trip_max_ms,\
         restore_min_ms,restore_typical_ms,restore_max_ms,release_min_ms,release_typical_ms,\
         release_max_ms,operate_min_ms,operate_typical_ms,operate_max_ms,min_rail_v,\
         not_reconnected_runs,restore_limit_s\n",
    );
    let quote = |s: &str| {
        if s.contains([',', '"', '\n']) {
            format!("\"{}\"", s.replace('"', "\"\""))
        } else {
            s.to_string()
        }
    };
    for r in &table.rows {
        let mut cells = vec![
            quote(&r.name),
            quote(&r.source),
            quote(&r.event),
            quote(&r.outcome),
        ];
        for s in [
            r.trip_latency_ms,
            r.restore_latency_ms,
            r.release_time_ms,
            r.operate_time_ms,
        ] {
            let [a, b, c] = match s {
                Some(s) => [
                    format!("{:.3}", s.min),
                    format!("{:.3}", s.typical),
                    format!("{:.3}", s.max),
                ],
                None => [String::new(), String::new(), String::new()],
            };
            cells.extend([a, b, c]);
        }
        cells.push(r.min_rail_v.map_or(String::new(), |v| format!("{v:.3}")));
        cells.push(r.not_reconnected_runs.to_string());
        cells.push(r.restore_limit_s.to_string());
        let _ = writeln!(out, "{}", cells.join(","));
    }
    out
}

fn escape(text: &str) -> String {
    text.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
}

/// The table as one self-contained HTML page (no network, no scripts): the heading, the
/// safety caution, the table, the static thresholds and the given SVG figures inline.
pub fn html(table: &Table, figures: &[(&str, &str)]) -> String {
    let mut out = String::new();
    let _ = write!(
        out,
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n\
         <title>{title}: timing table</title>\n<style>\n\
         body {{ font-family: sans-serif; margin: 2em auto; max-width: 1200px; color: #222; }}\n\
         table {{ border-collapse: collapse; margin: 1em 0; }}\n\
         th, td {{ border: 1px solid #bbb; padding: 0.3em 0.6em; text-align: left; }}\n\
         td.num {{ text-align: right; font-variant-numeric: tabular-nums; }}\n\
         th {{ background: #eee; }}\n\
         .caution {{ border-left: 4px solid #c00; padding: 0.5em 1em; background: #fff4f4; }}\n\
         figure {{ margin: 1.5em 0; }} svg {{ max-width: 100%; height: auto; }}\n\
         </style>\n</head>\n<body>\n<h1>{title}</h1>\n",
        title = escape(&table.circuit)
    );
    let _ = writeln!(out, "<p>{}</p>", escape(&summary_sentence(table)));
    let _ = writeln!(
        out,
        "<p class=\"caution\"><strong>Safety.</strong> Mains voltage can kill. These are \
         simulated results of a circuit model: they do not replace testing a real unit, the \
         electrical codes that apply, or the judgement of a licensed practitioner.</p>"
    );
    let _ = writeln!(
        out,
        "<table>\n<tr><th>test</th><th>source</th><th>event</th><th>outcome</th>\
         <th>trip latency</th><th>restore latency</th><th>release time</th>\
         <th>operate time</th></tr>"
    );
    for r in &table.rows {
        let [trip, restore, release, operate] = timing_cells(r);
        let _ = writeln!(
            out,
            "<tr><td>{}</td><td>{}</td><td><code>{}</code></td><td>{}</td>\
             <td class=\"num\">{trip}</td><td class=\"num\">{restore}</td>\
             <td class=\"num\">{release}</td><td class=\"num\">{operate}</td></tr>",
            escape(&r.name),
            escape(&r.source),
            escape(&r.event),
            escape(&r.outcome)
        );
    }
    let _ = writeln!(out, "</table>");
    if let Some(t) = &table.thresholds {
        let _ = writeln!(
            out,
            "<h2>Static thresholds</h2>\n<p>Each level held {} s, found by bisection to {} V.</p>\n\
             <table>\n<tr><th>side</th><th>trip</th><th>reset</th><th>hysteresis</th>\
             <th>slow ramp</th></tr>",
            t.hold_s, t.resolution_v
        );
        for [side, trip, reset, hysteresis, ramp] in threshold_rows(t) {
            let _ = writeln!(
                out,
                "<tr><td>{side}</td><td class=\"num\">{trip}</td><td class=\"num\">{reset}</td>\
                 <td class=\"num\">{hysteresis}</td><td>{}</td></tr>",
                escape(&ramp)
            );
        }
        let _ = writeln!(out, "</table>");
        for s in [&t.under, &t.over] {
            if let Some(note) = &s.note {
                let _ = writeln!(out, "<p>{}</p>", escape(note));
            }
        }
    }
    if !table.longest_ride_through.is_empty() {
        let _ = writeln!(
            out,
            "<h2>Longest ride-through</h2>\n<p>{}</p>\n<table>\n<tr><th>residual</th>\
             <th>longest ridden through</th><th>shortest trip</th></tr>",
            escape(&ride_through_text(table))
        );
        for [level, ride, trip] in ride_through_rows(table) {
            let _ = writeln!(
                out,
                "<tr><td class=\"num\">{level}</td><td class=\"num\">{}</td>\
                 <td class=\"num\">{}</td></tr>",
                escape(&ride),
                escape(&trip)
            );
        }
        let _ = writeln!(out, "</table>");
    }
    if let Some(spread) = &table.threshold_spread {
        let _ = writeln!(
            out,
            "<p>Over the {} tolerance cases (the table above is the nominal case):</p>\n\
             <table>\n<tr><th>threshold</th><th>min</th><th>typical</th><th>max</th></tr>",
            spread.cases
        );
        for [name, lo, typ, hi] in spread_rows(spread) {
            let _ = writeln!(
                out,
                "<tr><td>{name}</td><td class=\"num\">{lo}</td><td class=\"num\">{typ}</td>\
                 <td class=\"num\">{hi}</td></tr>"
            );
        }
        let _ = writeln!(out, "</table>");
    }
    if !table.screening.effects.is_empty() {
        let _ = writeln!(
            out,
            "<h2>Tolerance screening</h2>\n<p>{}</p>\n<table>\n<tr><th>value</th>\
             <th>share of a spread</th><th>change</th><th>in</th><th>corners</th></tr>",
            escape(SCREENING_TEXT)
        );
        for [field, percent, change, quantity, kept] in screening_rows(&table.screening.effects) {
            let _ = writeln!(
                out,
                "<tr><td><code>{}</code></td><td class=\"num\">{percent}</td>\
                 <td class=\"num\">{}</td><td>{}</td><td>{kept}</td></tr>",
                escape(&field),
                escape(&change),
                escape(&quantity)
            );
        }
        let _ = writeln!(out, "</table>");
        if let Some(text) = allowance_text(&table.screening) {
            let _ = writeln!(out, "<p>{}</p>", escape(&text));
        }
    }
    for note in &table.notes {
        let _ = writeln!(out, "<p><strong>Note:</strong> {}</p>", escape(note));
    }
    for (caption, svg) in figures {
        // An SVG document's XML declaration is not allowed inside HTML.
        let body = svg
            .trim_start()
            .strip_prefix("<?xml")
            .and_then(|rest| rest.split_once("?>").map(|(_, b)| b))
            .unwrap_or(svg);
        let _ = writeln!(
            out,
            "<figure>\n{}\n<figcaption>{}</figcaption>\n</figure>",
            body.trim(),
            escape(caption)
        );
    }
    let _ = writeln!(
        out,
        "<p>Made by sagtrip {}.</p>\n</body>\n</html>",
        env!("CARGO_PKG_VERSION")
    );
    out
}

/// The trip map of an HTML report: a coarse grid run from the settled protector (the sweep
/// command refines maps further).
#[derive(Clone, Debug, PartialEq)]
pub struct ReportMap {
    /// Levels, percent of nominal (dips below 100, swells above).
    pub levels_pct: Vec<f64>,
    /// How many durations, log-spaced from half a cycle to `longest_s`; 0 for no map.
    pub durations: usize,
    /// The longest duration, seconds.
    pub longest_s: f64,
    /// Start phase angles, degrees.
    pub phases_deg: Vec<f64>,
}

impl Default for ReportMap {
    /// Dips to 0, 10 .. 90% and swells to 110, 120, 130 and 150%, 10 durations from half a
    /// cycle to 10 s, at 0 and 90 degrees: 280 runs.
    fn default() -> Self {
        Self {
            levels_pct: (0..10)
                .map(|k| f64::from(k) * 10.0)
                .chain([110.0, 120.0, 130.0, 150.0])
                .collect(),
            durations: 10,
            longest_s: 10.0,
            phases_deg: vec![0.0, 90.0],
        }
    }
}

impl ReportMap {
    /// The grid at `frequency_hz` (its shortest duration is half a cycle).
    pub fn grid(&self, frequency_hz: f64) -> crate::sweep::Grid {
        crate::sweep::Grid {
            levels_pct: self.levels_pct.clone(),
            durations_s: if self.durations == 0 {
                Vec::new()
            } else {
                crate::sweep::log_durations(0.5 / frequency_hz, self.longest_s, self.durations)
            },
            phases_deg: self.phases_deg.clone(),
        }
    }
}

/// The whole HTML report of a table: the page with its trip map (run here on `settled`,
/// `progress` told of each point) and the threshold plot. A map with no durations is left
/// out.
pub fn html_report(
    table: &Table,
    settled: &Settled,
    circuit: &Circuit,
    map: &ReportMap,
    progress: &dyn Progress,
) -> Result<String, crate::plot::PlotError> {
    let mut figures: Vec<(String, String)> = Vec::new();
    let grid = map.grid(settled.frequency_hz);
    if !grid.points().is_empty() {
        progress.stage("trip map", grid.points().len());
        let points =
            crate::sweep::run_grid(settled, circuit, &grid, DEFAULT_EDGE_S, &|| progress.done());
        let cells = crate::sweep::cells(&points);
        let phases: Vec<String> = grid.phases_deg.iter().map(|p| format!("{p}")).collect();
        figures.push((
            format!(
                "Trip map: worst case over {} degrees for each level and duration, with the \
                 reference ride-through curves and the longest ride-through per level \
                 (sagtrip sweep refines the boundary)",
                phases.join(" and ")
            ),
            crate::plot::map_svg(&crate::plot::MapData {
                title: format!("Trip map: {}", circuit.title),
                cells: &cells,
                durations_s: &grid.durations_s,
                levels_pct: &grid.levels_pct,
                boundaries: Vec::new(),
                duration_boundary: &table.longest_ride_through,
                frequency_hz: settled.frequency_hz,
            })?,
        ));
    }
    if let Some(t) = &table.thresholds {
        figures.push((
            "Static thresholds: the trip voltages from normal supply and the reset voltages \
             after a trip"
                .to_string(),
            crate::plot::thresholds_svg(t, &format!("Static thresholds: {}", circuit.title))?,
        ));
    }
    let refs: Vec<(&str, &str)> = figures
        .iter()
        .map(|(c, s)| (c.as_str(), s.as_str()))
        .collect();
    Ok(html(table, &refs))
}
