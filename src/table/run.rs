//! Running a plan's tests over phases and tolerance cases, and the spreads of their timings.

use super::*;

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
