//! Capacitor and inductive windings: companion models on charge and flux.
//!
//! Capacitor, history `[v_n, i_n, i_(n-1)]`:
//! backward Euler `i = (C/h)(v - v_n)`; trapezoidal `i = (2C/h)(v - v_n) - i_n`.
//!
//! Windings (one inductor, or coupled windings), each with branch current `j_k` from its
//! first to its second pin, resistance `r_k` and inductive voltage `u_k = v_k - r_k j_k`;
//! fluxes `phi = L j` with the inductance matrix `L` (mutual terms `k sqrt(L1 L2)`).
//! Backward Euler `u = (phi - phi_n)/h`; trapezoidal `u + u_n = (2/h)(phi - phi_n)`.
//! History per winding: `[phi_k, u_k, u_k(n-1)]`.
//!
//! Besides the engine's divided differences of the state itself, each element estimates
//! the trapezoidal error from its own derivative history: `h^3 i'' / (12 C)` for a
//! capacitor, `h^3 u'' / (12 L)` for a winding. The two agree on smooth waveforms; the
//! second also sees a step that spans a corner (a diode turning off at a peak), where the
//! trapezoidal rule's use of the previous current makes the state look smooth but wrong.

use super::{Method, Mna, SolveContext};

pub(super) fn stamp_capacitor(
    m: &mut Mna<'_>,
    ctx: &SolveContext,
    a: usize,
    b: usize,
    c: f64,
    hist: &[f64],
) {
    let (v_n, i_n) = (hist[0], hist[1]);
    let (g, i_eq) = match ctx.method {
        Method::OperatingPoint => return,
        Method::BackwardEuler => {
            let g = c / ctx.h;
            (g, -g * v_n)
        }
        Method::Trapezoidal => {
            let g = 2.0 * c / ctx.h;
            (g, -g * v_n - i_n)
        }
    };
    m.conductance(a, b, g);
    m.current(a, b, i_eq);
}

/// Capacitor current at the end of a step to voltage `v`, from the companion model.
fn capacitor_current(ctx: &SolveContext, v: f64, c: f64, hist: &[f64]) -> f64 {
    let (v_n, i_n) = (hist[0], hist[1]);
    match ctx.method {
        Method::OperatingPoint => 0.0,
        Method::BackwardEuler => c / ctx.h * (v - v_n),
        Method::Trapezoidal => 2.0 * c / ctx.h * (v - v_n) - i_n,
    }
}

pub(super) fn commit_capacitor(ctx: &SolveContext, v: f64, c: f64, hist: &mut [f64]) {
    let i = capacitor_current(ctx, v, c, hist);
    hist[2] = hist[1];
    hist[1] = i;
    hist[0] = v;
}

/// `h^3 |y''| / 12` from samples of a derivative `y` at `-dt_prev`, `0` and `h`
/// (second divided difference, `y'' ~ 2 dd2`): the trapezoidal error of the integral of
/// `y` (a capacitor's charge, a winding's flux) over one step.
fn derivative_error(y_prev: f64, y_n: f64, y_new: f64, h: f64, dt_prev: f64) -> f64 {
    let d1 = (y_n - y_prev) / dt_prev;
    let d2 = (y_new - y_n) / h;
    let dd2 = (d2 - d1) / (h + dt_prev);
    h * h * h * dd2.abs() / 6.0
}

/// Truncation error of a capacitor's voltage for a trapezoidal step to `v`, volts.
pub(super) fn capacitor_error(
    ctx: &SolveContext,
    v: f64,
    c: f64,
    hist: &[f64],
    dt_prev: f64,
) -> f64 {
    let i = capacitor_current(ctx, v, c, hist);
    derivative_error(hist[2], hist[1], i, ctx.h, dt_prev) / c
}

/// Up to two magnetically coupled windings (one for a plain inductor).
#[derive(Clone, Debug)]
pub(crate) struct Windings {
    /// Number of windings in use (1 or 2).
    pub count: usize,
    /// Pin nodes of each winding: (first, second).
    pub pins: [(usize, usize); 2],
    /// Branch-current unknown of each winding.
    pub branch: [usize; 2],
    /// Inductance matrix, henries.
    pub inductance: [[f64; 2]; 2],
    /// Winding resistances, ohms.
    pub resistance: [f64; 2],
    /// Initial currents for a start from rest, amperes.
    pub initial_current: [f64; 2],
    /// History slots: `[phi_1, u_1, u_1 previous, phi_2, u_2, u_2 previous]` (first
    /// `3 * count` used).
    pub hist: usize,
}

impl Windings {
    /// A single winding (an inductor or a relay coil) between `a` and `b`.
    pub(crate) fn single(
        (a, b): (usize, usize),
        branch: usize,
        inductance: f64,
        resistance: f64,
        initial_current: f64,
        hist: usize,
    ) -> Self {
        Windings {
            count: 1,
            pins: [(a, b), (0, 0)],
            branch: [branch, 0],
            inductance: [[inductance, 0.0], [0.0, 0.0]],
            resistance: [resistance, 0.0],
            initial_current: [initial_current, 0.0],
            hist,
        }
    }

    pub(super) fn stamp(&self, m: &mut Mna<'_>, ctx: &SolveContext, hist: &[f64]) {
        let scale = match ctx.method {
            Method::OperatingPoint => 0.0,
            Method::BackwardEuler => 1.0 / ctx.h,
            Method::Trapezoidal => 2.0 / ctx.h,
        };
        for k in 0..self.count {
            let (p, n) = self.pins[k];
            let row = self.branch[k];
            m.branch_incidence(p, n, row);
            // Row: v_p - v_n - r j_k - scale * sum_l L_kl j_l = rhs.
            m.add(row, row, -self.resistance[k]);
            for l in 0..self.count {
                m.add(row, self.branch[l], -scale * self.inductance[k][l]);
            }
            let (phi_n, u_n) = (hist[self.hist + 3 * k], hist[self.hist + 3 * k + 1]);
            m.b[row] += match ctx.method {
                Method::OperatingPoint => 0.0,
                Method::BackwardEuler => -scale * phi_n,
                Method::Trapezoidal => -scale * phi_n - u_n,
            };
        }
    }

    fn flux(&self, k: usize, j: [f64; 2]) -> f64 {
        (0..self.count).map(|l| self.inductance[k][l] * j[l]).sum()
    }

    fn currents(&self, x: &[f64]) -> [f64; 2] {
        let mut j = [0.0; 2];
        for (k, slot) in j.iter_mut().enumerate().take(self.count) {
            *slot = x[self.branch[k]];
        }
        j
    }

    /// Inductive voltage of winding `k` at solution `x`.
    fn inductive_voltage(&self, ctx: &SolveContext, x: &[f64], k: usize) -> f64 {
        let (p, n) = self.pins[k];
        match ctx.method {
            Method::OperatingPoint => 0.0,
            _ => x[p] - x[n] - self.resistance[k] * x[self.branch[k]],
        }
    }

    pub(super) fn commit(&self, ctx: &SolveContext, x: &[f64], hist: &mut [f64]) {
        let j = self.currents(x);
        for k in 0..self.count {
            let slot = self.hist + 3 * k;
            hist[slot] = self.flux(k, j);
            hist[slot + 2] = hist[slot + 1];
            hist[slot + 1] = self.inductive_voltage(ctx, x, k);
        }
    }

    /// Largest truncation error of a winding's flux for a step to `x`, as
    /// (error, flux magnitude, self-inductance), webers and henries. Flux, not current,
    /// is the measure: an open winding coupled to a driven one carries almost no current
    /// while its flux follows the driven winding.
    pub(super) fn error(
        &self,
        ctx: &SolveContext,
        x: &[f64],
        hist: &[f64],
        dt_prev: f64,
    ) -> (f64, f64, f64) {
        let j = self.currents(x);
        let mut worst = (0.0, 0.0, 1.0);
        let mut worst_ratio = -1.0;
        for k in 0..self.count {
            let slot = self.hist + 3 * k;
            let u = self.inductive_voltage(ctx, x, k);
            let e = derivative_error(hist[slot + 2], hist[slot + 1], u, ctx.h, dt_prev);
            let flux = self.flux(k, j).abs().max(hist[slot].abs());
            let l = self.inductance[k][k];
            // Compare relative to a common scale: the error as a current in this winding.
            let ratio = e / (flux + l * 1e-9);
            if ratio > worst_ratio {
                worst_ratio = ratio;
                worst = (e, flux, l);
            }
        }
        worst
    }

    pub(super) fn rest_history(&self, hist: &mut [f64]) {
        for k in 0..self.count {
            let slot = self.hist + 3 * k;
            hist[slot] = self.flux(k, self.initial_current);
            hist[slot + 1] = 0.0;
            hist[slot + 2] = 0.0;
        }
    }

    pub(super) fn steady_history(&self, x: &[f64], hist: &mut [f64]) {
        let j = self.currents(x);
        for k in 0..self.count {
            let slot = self.hist + 3 * k;
            hist[slot] = self.flux(k, j);
            hist[slot + 1] = 0.0;
            hist[slot + 2] = 0.0;
        }
    }
}
