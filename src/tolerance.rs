//! Tolerance cases: the values a circuit's toleranced parts take in one run. The nominal
//! case (every value as written), every corner (each value at its lower or upper limit),
//! or seeded Monte Carlo samples (each value uniform between its limits).

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

/// The nominal case and every corner: 2^n cases for n toleranced values, corner k taking
/// value i at its upper limit when bit i of k is set.
pub fn corners(tolerances: &[Tolerance]) -> Result<Vec<Case>, String> {
    let n = tolerances.len();
    if n > MAX_CORNER_VALUES {
        return Err(format!(
            "{n} values with a tolerance make 2^{n} corners; corners are run for at most \
             {MAX_CORNER_VALUES} values: use Monte Carlo, or remove the tolerances of the \
             values that matter least"
        ));
    }
    let mut cases = vec![nominal()];
    for k in 0..(1usize << n) {
        let values = tolerances
            .iter()
            .enumerate()
            .map(|(i, t)| {
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
