//! Dense LU factorisation with partial pivoting, in place, with no allocation per call.
//!
//! The matrix is `dim` x `dim`, row-major; row and column 0 (the reference node) are
//! skipped, so the system solved is rows and columns `1..dim`. At the 10-50 unknowns of a
//! protector circuit a hand-written dense LU is as fast as any library's and lets us test
//! the pivots ourselves: a pivot that is tiny against its row's largest entry means the
//! circuit leaves that unknown undetermined, and we name it.

/// Relative pivot size below which the matrix is reported singular. Rows mix siemens with
/// the unit entries of branch currents, so a legitimately tiny conductance (a reverse-biased
/// junction's gmin, 1e-12 S) may sit beside a 1: the ratio only catches what is singular to
/// working precision. Ill-determined but non-singular unknowns are caught by the engine's
/// test on the size of the solution.
const PIVOT_RATIO: f64 = 1e-18;

/// LU workspace sized for one circuit.
#[derive(Clone, Debug)]
pub struct DenseLu {
    dim: usize,
    perm: Vec<usize>,
    row_scale: Vec<f64>,
}

/// The matrix is singular (to working precision) at this unknown.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Singular {
    /// Index of the unknown (column) whose pivot vanished.
    pub unknown: usize,
}

impl DenseLu {
    /// A workspace for `dim` x `dim` systems (including the reference row and column).
    pub fn new(dim: usize) -> Self {
        Self {
            dim,
            perm: (0..dim).collect(),
            row_scale: vec![0.0; dim],
        }
    }

    /// Factors `a` in place into L (unit lower, below the diagonal) and U.
    pub fn factor(&mut self, a: &mut [f64]) -> Result<(), Singular> {
        let d = self.dim;
        debug_assert_eq!(a.len(), d * d);
        for i in 1..d {
            self.perm[i] = i;
            let row = &a[i * d + 1..i * d + d];
            self.row_scale[i] = row.iter().fold(0.0_f64, |m, v| m.max(v.abs()));
        }
        for k in 1..d {
            // Partial pivoting on the column, choosing the largest entry.
            let mut best = k;
            let mut best_val = a[k * d + k].abs();
            for i in k + 1..d {
                let v = a[i * d + k].abs();
                if v > best_val {
                    best = i;
                    best_val = v;
                }
            }
            if best != k {
                for j in 0..d {
                    a.swap(k * d + j, best * d + j);
                }
                self.perm.swap(k, best);
                self.row_scale.swap(k, best);
            }
            let pivot = a[k * d + k];
            if pivot == 0.0 || pivot.abs() <= PIVOT_RATIO * self.row_scale[k] || !pivot.is_finite()
            {
                return Err(Singular { unknown: k });
            }
            let inv = 1.0 / pivot;
            for i in k + 1..d {
                let factor = a[i * d + k] * inv;
                if factor != 0.0 {
                    a[i * d + k] = factor;
                    let (upper, lower) = a.split_at_mut(i * d);
                    let pivot_row = &upper[k * d + k + 1..k * d + d];
                    let target = &mut lower[k + 1..d];
                    for (t, p) in target.iter_mut().zip(pivot_row) {
                        *t -= factor * p;
                    }
                } else {
                    a[i * d + k] = 0.0;
                }
            }
        }
        Ok(())
    }

    /// Solves `A x = b` with the factors in `a`; `b` becomes `x` (entry 0 is set to 0).
    /// `work` is scratch of length `dim`.
    pub fn solve(&self, a: &[f64], b: &mut [f64], work: &mut [f64]) {
        let d = self.dim;
        for i in 1..d {
            work[i] = b[self.perm[i]];
        }
        // Forward substitution with unit L.
        for i in 1..d {
            let row = &a[i * d..i * d + i];
            let mut s = work[i];
            for (j, l) in row.iter().enumerate().skip(1) {
                s -= l * work[j];
            }
            work[i] = s;
        }
        // Back substitution with U.
        for i in (1..d).rev() {
            let row = &a[i * d..i * d + d];
            let mut s = work[i];
            for j in i + 1..d {
                s -= row[j] * work[j];
            }
            work[i] = s / row[i];
        }
        b[0] = 0.0;
        b[1..d].copy_from_slice(&work[1..d]);
    }
}
