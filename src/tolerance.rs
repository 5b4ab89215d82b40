//! Tolerance cases: the values a circuit's toleranced parts take in one run. The nominal
//! case (every value as written), every corner (each value at its lower or upper limit),
//! corners over a chosen subset after screening (each value alone at its limits, ranked by
//! how much it moves the results), or seeded Monte Carlo samples (each value uniform between
//! its limits).

use std::collections::HashMap;

use crate::circuit::Tolerance;

/// One assignment of the toleranced values.
#[derive(Clone, Debug, PartialEq)]
pub struct Case {
    /// A short label: `nominal`, `corner 5`, `sample 12`.
    pub label: String,
    /// Field to value; a field not named keeps its written value.
    pub values: HashMap<String, f64>,
}

/// Every value as written.
pub fn nominal() -> Case {
    Case {
        label: "nominal".into(),
        values: HashMap::new(),
    }
}

/// The most values whose corners are run in full (2^8 = 256 corners).
pub const MAX_CORNER_VALUES: usize = 8;

/// Corners asked of more values than are run in full.
#[derive(Clone, Debug, PartialEq, thiserror::Error)]
#[error(
    "{count} values with a tolerance make 2^{count} corners; corners are run for at most \
     {MAX_CORNER_VALUES} values: screen them, use Monte Carlo, or remove the tolerances of \
     the values that matter least"
)]
pub struct TooManyCorners {
    /// How many values were asked.
    pub count: usize,
}

/// The nominal case and every corner: 2^n cases for n toleranced values, corner k taking
/// value i at its upper limit when bit i of k is set.
pub fn corners(tolerances: &[Tolerance]) -> Result<Vec<Case>, TooManyCorners> {
    let all: Vec<usize> = (0..tolerances.len()).collect();
    corners_of(tolerances, &all)
}

/// The nominal case and every corner of the values `keep` (indices into `tolerances`), the
/// others as written: corner k takes `keep[i]` at its upper limit when bit i of k is set.
pub fn corners_of(tolerances: &[Tolerance], keep: &[usize]) -> Result<Vec<Case>, TooManyCorners> {
    let n = keep.len();
    if n > MAX_CORNER_VALUES {
        return Err(TooManyCorners { count: n });
    }
    let mut cases = vec![nominal()];
    for k in 0..(1usize << n) {
        let values = keep
            .iter()
            .enumerate()
            .map(|(i, &t)| {
                let t = &tolerances[t];
                let v = if k >> i & 1 == 1 { t.max } else { t.min };
                (t.field.clone(), v)
            })
            .collect();
        cases.push(Case {
            label: format!("corner {}", k + 1),
            values,
        });
    }
    Ok(cases)
}

/// Screening cases: each value alone at its lower limit, then alone at its upper limit,
/// the others as written. Value i's cases are at `2 i` (low) and `2 i + 1` (high).
pub fn one_at_a_time(tolerances: &[Tolerance]) -> Vec<Case> {
    tolerances
        .iter()
        .flat_map(|t| {
            [("low", t.min), ("high", t.max)].map(|(end, v)| Case {
                label: format!("{} {end}", t.field),
                values: HashMap::from([(t.field.clone(), v)]),
            })
        })
        .collect()
}

/// A quantity a screening case measures.
#[derive(Clone, Debug, PartialEq)]
pub struct Quantity {
    /// What it is, e.g. `under-voltage trip` or `trip latency of dip 70% 25 cycles`.
    pub name: String,
    /// Its value; `None` where it does not exist (no trip, so no trip latency).
    pub value: Option<f64>,
    /// The smallest spread of this quantity that counts, in its own unit (below it the
    /// quantity is as good as constant: a bisection's resolution, a tenth of a
    /// millisecond). A quantity whose changes add up to less is left out of the ranking.
    pub floor: f64,
}

/// How much one toleranced value moves the results between its limits.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct Effect {
    /// The field, e.g. `part.r_bot.resistance`.
    pub field: String,
    /// The value's largest share of any quantity's estimated spread over the corners:
    /// its change between its two screening cases, percent of the sum of every value's
    /// change of that quantity (so every quantity, a threshold in volts or a latency in
    /// milliseconds, is on one scale); 100 where a quantity exists in one case only.
    pub percent: f64,
    /// That change, in the quantity's own unit (volts, milliseconds); infinite where the
    /// quantity exists in one case only.
    pub change: f64,
    /// The quantity that changed most.
    pub quantity: String,
    /// Whether the corners vary this value (otherwise it stays as written).
    pub kept: bool,
}

/// The change of each quantity between value i's low and high cases: `[i][k]`, in the
/// quantity's unit; infinite where it exists in one case only.
fn changes(tolerances: &[Tolerance], measured: &[Vec<Quantity>]) -> Vec<Vec<f64>> {
    (0..tolerances.len())
        .map(|i| {
            let (low, high) = (&measured[2 * i], &measured[2 * i + 1]);
            low.iter()
                .zip(high)
                .map(|(a, b)| match (a.value, b.value) {
                    (Some(x), Some(y)) => (x - y).abs(),
                    (None, None) => 0.0,
                    _ => f64::INFINITY,
                })
                .collect()
        })
        .collect()
}

/// Ranks the values by their largest share of any quantity's estimated corner spread
/// (see [`Effect::percent`]), largest first (file order among equals), and marks the first
/// `keep` as kept. `measured[2 i]` and `measured[2 i + 1]` are the quantities of value i's
/// low and high cases (from [`one_at_a_time`]), in the same order in every case.
///
/// One scale for every quantity: a value that moves a threshold by 4 V of an 8 V spread
/// ranks with one that moves a latency by 20 ms of a 40 ms spread. The estimate adds the
/// values' changes (a first-order, linear view of the corners).
pub fn rank(tolerances: &[Tolerance], measured: &[Vec<Quantity>], keep: usize) -> Vec<Effect> {
    let delta = changes(tolerances, measured);
    let quantities = measured.first().map_or(0, Vec::len);
    let totals: Vec<f64> = (0..quantities)
        .map(|k| delta.iter().map(|d| d[k]).filter(|x| x.is_finite()).sum())
        .collect();
    let mut effects: Vec<Effect> = tolerances
        .iter()
        .enumerate()
        .map(|(i, t)| {
            let mut best = (0.0, 0.0, String::new());
            for k in 0..quantities {
                let d = delta[i][k];
                let share = if d.is_infinite() {
                    1.0
                } else if totals[k] < measured[0][k].floor || totals[k] == 0.0 {
                    0.0
                } else {
                    d / totals[k]
                };
                if share > best.0 {
                    best = (share, d, measured[0][k].name.clone());
                }
            }
            Effect {
                field: t.field.clone(),
                percent: 100.0 * best.0,
                change: best.1,
                quantity: best.2,
                kept: false,
            }
        })
        .collect();
    effects.sort_by(|a, b| b.percent.total_cmp(&a.percent));
    for e in effects.iter_mut().take(keep) {
        e.kept = true;
    }
    effects
}

/// What the values held as written could add to each quantity's spread: for each
/// quantity, half the sum of the held values' changes between their limits (the
/// first-order amount by which the corners of the kept values may fall short on each
/// side), with its name; infinite where a held value makes the quantity appear or vanish.
/// `held[i]` says whether value i is held.
pub fn held_allowance(
    tolerances: &[Tolerance],
    measured: &[Vec<Quantity>],
    held: &[bool],
) -> Vec<(String, f64)> {
    let delta = changes(tolerances, measured);
    let quantities = measured.first().map_or(0, Vec::len);
    (0..quantities)
        .map(|k| {
            let sum: f64 = (0..tolerances.len())
                .filter(|&i| held[i])
                .map(|i| delta[i][k])
                .sum();
            (measured[0][k].name.clone(), 0.5 * sum)
        })
        .collect()
}

/// A small, fixed generator (SplitMix64): the same seed always gives the same samples.
struct SplitMix(u64);

impl SplitMix {
    fn next_unit(&mut self) -> f64 {
        self.0 = self.0.wrapping_add(0x9e37_79b9_7f4a_7c15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
        z ^= z >> 31;
        (z >> 11) as f64 / (1u64 << 53) as f64
    }
}

/// The nominal case and `count` samples, each value drawn uniformly between its limits
/// with a generator seeded by `seed`.
pub fn monte_carlo(tolerances: &[Tolerance], count: usize, seed: u64) -> Vec<Case> {
    let mut rng = SplitMix(seed);
    let mut cases = vec![nominal()];
    for k in 0..count {
        let values = tolerances
            .iter()
            .map(|t| (t.field.clone(), t.min + rng.next_unit() * (t.max - t.min)))
            .collect();
        cases.push(Case {
            label: format!("sample {}", k + 1),
            values,
        });
    }
    cases
}

#[cfg(test)]
mod tests {
    use super::*;

    fn tol(field: &str, min: f64, max: f64) -> Tolerance {
        Tolerance {
            field: field.into(),
            nominal: 0.5 * (min + max),
            min,
            max,
            line: 1,
            column: 1,
        }
    }

    #[test]
    fn corners_cover_every_combination_once() {
        let t = [tol("a", 1.0, 2.0), tol("b", 10.0, 20.0)];
        let cases = corners(&t).unwrap();
        assert_eq!(cases.len(), 5);
        let mut seen: Vec<(f64, f64)> = cases[1..]
            .iter()
            .map(|c| (c.values["a"], c.values["b"]))
            .collect();
        seen.sort_by(|x, y| x.partial_cmp(y).unwrap());
        assert_eq!(seen, [(1.0, 10.0), (1.0, 20.0), (2.0, 10.0), (2.0, 20.0)]);
        let many: Vec<Tolerance> = (0..9).map(|i| tol(&format!("v{i}"), 1.0, 2.0)).collect();
        assert!(corners(&many).is_err());
    }

    #[test]
    fn screening_moves_one_value_at_a_time_and_ranks_by_the_largest_change() {
        let t = [tol("a", 1.0, 2.0), tol("b", 10.0, 20.0), tol("c", 0.0, 1.0)];
        let cases = one_at_a_time(&t);
        assert_eq!(cases.len(), 6);
        assert_eq!(cases[2].values, HashMap::from([("b".to_string(), 10.0)]));
        assert_eq!(cases[3].values, HashMap::from([("b".to_string(), 20.0)]));
        let q = |name: &str, value: Option<f64>| Quantity {
            name: name.into(),
            value,
            floor: 0.5,
        };
        let measured = vec![
            vec![q("x", Some(50.0)), q("y", Some(1.0))],
            vec![q("x", Some(51.0)), q("y", Some(1.0))],
            vec![q("x", Some(50.0)), q("y", Some(1.0))],
            vec![q("x", Some(50.0)), q("y", Some(9.0))],
            vec![q("x", Some(50.0)), q("y", None)],
            vec![q("x", Some(50.0)), q("y", Some(1.0))],
        ];
        let ranked = rank(&t, &measured, 2);
        let order: Vec<(&str, f64, &str, bool)> = ranked
            .iter()
            .map(|e| (e.field.as_str(), e.percent, e.quantity.as_str(), e.kept))
            .collect();
        // x moves by 1 (all of it from a), y by 8 (from b) and appears or vanishes with c:
        // a has all of x's spread, as c has y's, and b all of y's finite spread.
        assert_eq!(
            order,
            [
                ("a", 100.0, "x", true),
                ("b", 100.0, "y", true),
                ("c", 100.0, "y", false)
            ]
        );
        assert_eq!(ranked[1].change, 8.0);
        // Holding a: x may fall short by half its change on each side.
        let held = held_allowance(&t, &measured, &[true, false, false]);
        assert_eq!(held, [("x".to_string(), 0.5), ("y".to_string(), 0.0)]);
        // A spread under the floor does not rank: x moving by 0.4 ranks nobody on x.
        let mut small = measured.clone();
        small[1][0].value = Some(50.4);
        let ranked = rank(&t, &small, 1);
        assert_eq!(ranked.iter().find(|e| e.field == "a").unwrap().percent, 0.0);
        let kept = corners_of(&t, &[1]).unwrap();
        assert_eq!(kept.len(), 3);
        assert!(kept[1..].iter().all(|c| c.values.len() == 1));
    }

    #[test]
    fn monte_carlo_is_reproducible_and_inside_the_limits() {
        let t = [tol("a", 1.0, 2.0), tol("b", -3.0, -1.0)];
        let one = monte_carlo(&t, 50, 7);
        assert_eq!(one, monte_carlo(&t, 50, 7));
        assert_ne!(one, monte_carlo(&t, 50, 8));
        for c in &one[1..] {
            assert!((1.0..=2.0).contains(&c.values["a"]));
            assert!((-3.0..=-1.0).contains(&c.values["b"]));
        }
    }
}
