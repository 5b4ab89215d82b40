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
                if factor == 0.0 {
                    a[i * d + k] = 0.0;
                } else {
                    a[i * d + k] = factor;
                    let (upper, lower) = a.split_at_mut(i * d);
                    let pivot_row = &upper[k * d + k + 1..k * d + d];
                    let target = &mut lower[k + 1..d];
                    for (t, p) in target.iter_mut().zip(pivot_row) {
                        *t -= factor * p;
                    }
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

/// Threshold for choosing a pivot: at least this fraction of the largest entry in its
/// column among the rows still to eliminate (threshold partial pivoting).
const CHOICE_THRESHOLD: f64 = 0.1;
/// On a refactorisation the kept pivot must stay at least this fraction of its column's
/// largest entry, or the order is chosen anew.
const KEEP_THRESHOLD: f64 = 1e-3;

/// Sparse LU with a pivot order chosen once and reused.
///
/// The matrix stays in dense `dim` x `dim` storage (at protector sizes it fits in cache),
/// but elimination only visits the entries of the structural pattern and its fill-in. The
/// first factorisation chooses pivots by the Markowitz criterion (fewest operations) among
/// entries within `CHOICE_THRESHOLD` (10%) of their column's largest, and records for each pivot
/// the rows below it and the columns right of it. Later factorisations replay that plan
/// ([`SparseLu::refactor`]), which costs only the real arithmetic; when a kept pivot has
/// become too small against its column the caller chooses a new order
/// ([`SparseLu::factor_choosing_order`]).
#[derive(Clone, Debug)]
pub struct SparseLu {
    dim: usize,
    /// Structural pattern of the assembled matrix (row-major, `dim` x `dim`).
    base_pattern: Vec<bool>,
    /// The pattern with the fill-in of the present order.
    pattern: Vec<bool>,
    /// Row and column of the k-th pivot.
    pivot_row: Vec<usize>,
    pivot_col: Vec<usize>,
    /// Rows eliminated by pivot k: `lower[lower_start[k]..lower_start[k + 1]]`.
    lower_start: Vec<usize>,
    lower: Vec<usize>,
    /// Columns updated by pivot k: `upper[upper_start[k]..upper_start[k + 1]]`.
    upper_start: Vec<usize>,
    upper: Vec<usize>,
    ordered: bool,
    /// Indices of every entry of `pattern` (for clearing the matrix between assemblies).
    entries: Vec<usize>,
}

/// Why a refactorisation with the kept pivot order was refused.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum RefactorError {
    /// No order has been chosen yet, or a kept pivot became too small: choose anew.
    NeedsOrder,
}

impl SparseLu {
    /// A solver for `dim` x `dim` systems whose structural nonzeros are `pattern`
    /// (row-major; row and column 0 are ignored; the diagonal is always included).
    pub fn new(dim: usize, pattern: &[bool]) -> Self {
        let mut pattern = pattern.to_vec();
        for i in 1..dim {
            pattern[i * dim + i] = true;
        }
        let n = dim.saturating_sub(1);
        Self {
            dim,
            base_pattern: pattern.clone(),
            pattern,
            pivot_row: vec![0; n],
            pivot_col: vec![0; n],
            lower_start: vec![0; n + 1],
            lower: Vec::with_capacity(n * n),
            upper_start: vec![0; n + 1],
            upper: Vec::with_capacity(n * n),
            ordered: false,
            entries: Vec::with_capacity(dim * dim),
        }
        .with_entries()
    }

    fn with_entries(mut self) -> Self {
        self.update_entries();
        self
    }

    fn update_entries(&mut self) {
        self.entries.clear();
        self.entries.extend(
            self.pattern
                .iter()
                .enumerate()
                .filter(|(_, &p)| p)
                .map(|(i, _)| i),
        );
    }

    /// Indices (row-major) of every entry the assembly or the factorisation can make
    /// nonzero: clearing these clears the matrix.
    pub fn entries(&self) -> &[usize] {
        &self.entries
    }

    /// Whether a pivot order has been chosen.
    pub fn has_order(&self) -> bool {
        self.ordered
    }

    /// Number of stored entries of L and U (pattern with fill-in).
    pub fn fill(&self) -> usize {
        self.lower.len() + self.upper.len() + self.pivot_row.len()
    }

    /// Chooses a pivot order for `a` and factors it in place.
    pub fn factor_choosing_order(&mut self, a: &mut [f64]) -> Result<(), Singular> {
        let d = self.dim;
        let n = d - 1;
        self.ordered = false;
        self.pattern.copy_from_slice(&self.base_pattern);
        let mut row_active = vec![true; d];
        let mut col_active = vec![true; d];
        row_active[0] = false;
        col_active[0] = false;
        // Row scales for the singularity test, from the unfactored matrix.
        let row_scale: Vec<f64> = (0..d)
            .map(|i| (1..d).map(|j| a[i * d + j].abs()).fold(0.0_f64, f64::max))
            .collect();
        self.lower.clear();
        self.upper.clear();
        for k in 0..n {
            // Counts of structural nonzeros in the active submatrix.
            let mut row_count = vec![0usize; d];
            let mut col_count = vec![0usize; d];
            let mut col_max = vec![0.0_f64; d];
            for i in 1..d {
                if !row_active[i] {
                    continue;
                }
                for j in 1..d {
                    if col_active[j] && self.pattern[i * d + j] {
                        row_count[i] += 1;
                        col_count[j] += 1;
                        col_max[j] = col_max[j].max(a[i * d + j].abs());
                    }
                }
            }
            let mut best: Option<(usize, usize, usize, f64)> = None;
            for i in 1..d {
                if !row_active[i] {
                    continue;
                }
                for j in 1..d {
                    if !col_active[j] || !self.pattern[i * d + j] {
                        continue;
                    }
                    let v = a[i * d + j].abs();
                    if v == 0.0 || v < CHOICE_THRESHOLD * col_max[j] {
                        continue;
                    }
                    let cost = (row_count[i] - 1) * (col_count[j] - 1);
                    let better = match best {
                        None => true,
                        Some((_, _, c, m)) => cost < c || (cost == c && v > m),
                    };
                    if better {
                        best = Some((i, j, cost, v));
                    }
                }
            }
            let Some((pr, pc, _, magnitude)) = best else {
                let unknown = (1..d).find(|&j| col_active[j]).unwrap_or(1);
                return Err(Singular { unknown });
            };
            if magnitude <= PIVOT_RATIO * row_scale[pr] || !magnitude.is_finite() {
                return Err(Singular { unknown: pc });
            }
            self.pivot_row[k] = pr;
            self.pivot_col[k] = pc;
            row_active[pr] = false;
            col_active[pc] = false;
            self.lower_start[k] = self.lower.len();
            self.upper_start[k] = self.upper.len();
            let pattern = &self.pattern;
            self.lower
                .extend((1..d).filter(|&i| row_active[i] && pattern[i * d + pc]));
            self.upper
                .extend((1..d).filter(|&j| col_active[j] && pattern[pr * d + j]));
            self.lower_start[k + 1] = self.lower.len();
            self.upper_start[k + 1] = self.upper.len();
            // Fill-in.
            for li in self.lower_start[k]..self.lower.len() {
                let i = self.lower[li];
                for ui in self.upper_start[k]..self.upper.len() {
                    let j = self.upper[ui];
                    self.pattern[i * d + j] = true;
                }
            }
            self.eliminate(a, k);
        }
        self.ordered = true;
        self.update_entries();
        Ok(())
    }

    /// The elimination of pivot `k` (ranges must be set).
    #[inline]
    fn eliminate(&self, a: &mut [f64], k: usize) {
        let d = self.dim;
        let (pr, pc) = (self.pivot_row[k], self.pivot_col[k]);
        let inv = 1.0 / a[pr * d + pc];
        let lower = &self.lower[self.lower_start[k]..self.lower_start[k + 1]];
        let upper = &self.upper[self.upper_start[k]..self.upper_start[k + 1]];
        for &i in lower {
            let f = a[i * d + pc] * inv;
            a[i * d + pc] = f;
            if f != 0.0 {
                for &j in upper {
                    a[i * d + j] -= f * a[pr * d + j];
                }
            }
        }
    }

    /// Factors `a` in place with the kept pivot order.
    pub fn refactor(&mut self, a: &mut [f64]) -> Result<(), RefactorError> {
        if !self.ordered {
            return Err(RefactorError::NeedsOrder);
        }
        let d = self.dim;
        for k in 0..self.pivot_row.len() {
            let (pr, pc) = (self.pivot_row[k], self.pivot_col[k]);
            let pivot = a[pr * d + pc].abs();
            let lower = &self.lower[self.lower_start[k]..self.lower_start[k + 1]];
            let column_max = lower
                .iter()
                .map(|&i| a[i * d + pc].abs())
                .fold(0.0_f64, f64::max);
            if pivot == 0.0 || !pivot.is_finite() || pivot < KEEP_THRESHOLD * column_max {
                return Err(RefactorError::NeedsOrder);
            }
            self.eliminate(a, k);
        }
        Ok(())
    }

    /// Solves `A x = b` with the factors in `a`; `b` becomes `x` (entry 0 is set to 0).
    /// `work` is scratch of length `dim`.
    pub fn solve(&self, a: &[f64], b: &mut [f64], work: &mut [f64]) {
        let d = self.dim;
        let n = self.pivot_row.len();
        // Forward: eliminate b in pivot order (b is indexed by original rows).
        for k in 0..n {
            let (pr, pc) = (self.pivot_row[k], self.pivot_col[k]);
            let v = b[pr];
            if v != 0.0 {
                for &i in &self.lower[self.lower_start[k]..self.lower_start[k + 1]] {
                    b[i] -= a[i * d + pc] * v;
                }
            }
        }
        // Backward: unknowns by pivot column.
        for k in (0..n).rev() {
            let (pr, pc) = (self.pivot_row[k], self.pivot_col[k]);
            let mut s = b[pr];
            for &j in &self.upper[self.upper_start[k]..self.upper_start[k + 1]] {
                s -= a[pr * d + j] * work[j];
            }
            work[pc] = s / a[pr * d + pc];
        }
        b[0] = 0.0;
        b[1..d].copy_from_slice(&work[1..d]);
    }
}
