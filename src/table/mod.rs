//! The datasheet timing table: a test plan (by default the IEC 61000-4-11 preferred levels
//! of a class, swells and the static thresholds) run at several start phase angles, each
//! test summarised as its outcome and the spread of its timings.

use crate::circuit::Circuit;
use crate::profile::{iec_presets, resolve, Duration, Profile, Step, DEFAULT_EDGE_S};
use crate::scenario::{EventOptions, EventRun, ScenarioError, Settled};
use crate::thresholds::StaticThresholds;
use crate::tolerance::{Effect, Quantity};
use rayon::prelude::*;
use serde::{Deserialize, Serialize};
use std::fmt::Write as _;

mod plan;
mod render;
mod run;
mod screen;
pub use plan::*;
pub use render::*;
pub use run::*;
pub use screen::*;

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

/// The circuit of one tolerance case, powered up and settled.
pub(crate) fn settle_case(
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

pub use crate::progress::Progress;

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
    use crate::tolerance::MAX_CORNER_VALUES;
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
    let (cases, description, screening) = tolerance_cases(source, options, plan, cases, progress)?;
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
    let longest_ride_through = longest_ride_through(source, &settled, plan, &known, progress)?;
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

/// The tolerance cases asked for (nominal first) and their description; with screening,
/// its result.
fn tolerance_cases(
    source: Source<'_>,
    options: &EventOptions,
    plan: &Plan,
    cases: Cases,
    progress: &dyn Progress,
) -> Result<(Vec<crate::tolerance::Case>, String, Screening), TableError> {
    use crate::tolerance::{self, MAX_CORNER_VALUES};
    let circuit = source.circuit;
    let n_values = circuit.tolerances.len();
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
    Ok((cases, description, screening))
}

/// The longest ride-through at each of the plan's levels, on the nominal circuit.
fn longest_ride_through(
    source: Source<'_>,
    settled: &Settled,
    plan: &Plan,
    known: &[crate::sweep::Cell],
    progress: &dyn Progress,
) -> Result<Vec<crate::sweep::DurationBoundaryPoint>, TableError> {
    let Source { path, circuit, .. } = source;
    progress.stage("longest ride-through", plan.ride_through_levels.len());
    let range = (0.5 / settled.frequency_hz, RIDE_THROUGH_LONGEST_S);
    plan.ride_through_levels
        .iter()
        .map(|&level| {
            let b = crate::sweep::refine_duration_boundary(
                settled,
                circuit,
                level,
                &plan.phases,
                range,
                known,
                DEFAULT_EDGE_S,
            );
            progress.done();
            b.map_err(|e| TableError::RideThrough {
                path: path.to_string(),
                source: e,
            })
        })
        .collect::<Result<Vec<_>, TableError>>()
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
