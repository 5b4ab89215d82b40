//! Capacitor and inductive windings: companion models on charge and flux.
//!
//! Capacitor, history `[v_n, i_n]`:
//! backward Euler `i = (C/h)(v - v_n)`; trapezoidal `i = (2C/h)(v - v_n) - i_n`.
//!
//! Windings (one inductor, or coupled windings), each with branch current `j_k` from its
//! first to its second pin, resistance `r_k` and inductive voltage `u_k = v_k - r_k j_k`;
//! fluxes `phi = L j` with the inductance matrix `L` (mutual terms `k sqrt(L1 L2)`).
//! Backward Euler `u = (phi - phi_n)/h`; trapezoidal `u + u_n = (2/h)(phi - phi_n)`.
//! History per winding: `[phi_k, u_k]`.

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

pub(super) fn commit_capacitor(ctx: &SolveContext, v: f64, c: f64, hist: &mut [f64]) {
    let (v_n, i_n) = (hist[0], hist[1]);
    hist[1] = match ctx.method {
        Method::OperatingPoint => 0.0,
        Method::BackwardEuler => c / ctx.h * (v - v_n),
        Method::Trapezoidal => 2.0 * c / ctx.h * (v - v_n) - i_n,
    };
    hist[0] = v;
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
    /// History slots: `[phi_1, u_1, phi_2, u_2]` (first `2 * count` used).
    pub hist: usize,
}

impl Windings {
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
            let (phi_n, u_n) = (hist[self.hist + 2 * k], hist[self.hist + 2 * k + 1]);
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

    pub(super) fn commit(&self, ctx: &SolveContext, x: &[f64], hist: &mut [f64]) {
        let j = self.currents(x);
        for k in 0..self.count {
            let (p, n) = self.pins[k];
            let slot = self.hist + 2 * k;
            hist[slot] = self.flux(k, j);
            hist[slot + 1] = match ctx.method {
                Method::OperatingPoint => 0.0,
                _ => x[p] - x[n] - self.resistance[k] * j[k],
            };
        }
    }

    pub(super) fn rest_history(&self, hist: &mut [f64]) {
        for k in 0..self.count {
            hist[self.hist + 2 * k] = self.flux(k, self.initial_current);
            hist[self.hist + 2 * k + 1] = 0.0;
        }
    }

    pub(super) fn steady_history(&self, x: &[f64], hist: &mut [f64]) {
        let j = self.currents(x);
        for k in 0..self.count {
            hist[self.hist + 2 * k] = self.flux(k, j);
            hist[self.hist + 2 * k + 1] = 0.0;
        }
    }
}
