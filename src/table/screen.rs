//! Screening the toleranced values before the corners.

use super::*;

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
