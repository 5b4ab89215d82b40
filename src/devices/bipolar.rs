//! Bipolar transistor, Ebers-Moll transport model.
//!
//! For an NPN with `vbe = vb - ve`, `vbc = vb - vc`:
//!
//! ```text
//! Ic = Is (exp(vbe/Vt) - exp(vbc/Vt)) - (Is / beta_R)(exp(vbc/Vt) - 1)
//! Ib = (Is / beta_F)(exp(vbe/Vt) - 1) + (Is / beta_R)(exp(vbc/Vt) - 1)
//! Ie = -(Ic + Ib)
//! ```
//!
//! currents into the terminals. A PNP is the NPN with voltages and currents negated. Both
//! junction voltages are limited between Newton iterations like a diode's.

use super::diode::{limit_junction, limited_exp};
use super::Mna;
use crate::circuit::{BipolarParams, THERMAL_VOLTAGE};

#[derive(Clone, Debug)]
pub(crate) struct Bipolar {
    pub collector: usize,
    pub base: usize,
    pub emitter: usize,
    pub params: BipolarParams,
    /// Scratch slots: [vbe limited, vbc limited, 1 if limited].
    pub scratch: usize,
}

/// Scratch slots a bipolar transistor uses.
pub(crate) const BIPOLAR_SCRATCH: usize = 3;

impl Bipolar {
    fn v_crit(&self) -> f64 {
        THERMAL_VOLTAGE
            * (THERMAL_VOLTAGE / (std::f64::consts::SQRT_2 * self.params.saturation_current)).ln()
    }

    /// Junction voltages (polarity-scaled) at `x`.
    fn junctions(&self, x: &[f64]) -> (f64, f64) {
        let p = self.params.polarity;
        (
            p * (x[self.base] - x[self.emitter]),
            p * (x[self.base] - x[self.collector]),
        )
    }

    /// (ic, ib) in NPN terms and their derivatives [[dic/dvbe, dic/dvbc], [dib/dvbe, dib/dvbc]].
    fn currents(&self, vbe: f64, vbc: f64) -> ((f64, f64), [[f64; 2]; 2]) {
        let p = &self.params;
        let vt = THERMAL_VOLTAGE;
        let (ef, def) = limited_exp(vbe / vt);
        let (er, der) = limited_exp(vbc / vt);
        let is = p.saturation_current;
        let ic = is * (ef - er) - is / p.reverse_beta * (er - 1.0);
        let ib = is / p.forward_beta * (ef - 1.0) + is / p.reverse_beta * (er - 1.0);
        let d = [
            [
                is * def / vt,
                -is * der / vt - is / p.reverse_beta * der / vt,
            ],
            [
                is / p.forward_beta * def / vt,
                is / p.reverse_beta * der / vt,
            ],
        ];
        ((ic, ib), d)
    }

    pub(super) fn begin_newton(&self, accepted: &[f64], scratch: &mut [f64]) {
        let (vbe, vbc) = self.junctions(accepted);
        scratch[self.scratch] = vbe;
        scratch[self.scratch + 1] = vbc;
    }

    pub(super) fn stamp(&self, m: &mut Mna<'_>, x: &[f64], gmin: f64, scratch: &mut [f64]) {
        let s = self.scratch;
        let (vbe_guess, vbc_guess) = self.junctions(x);
        let v_crit = self.v_crit();
        let vbe = limit_junction(vbe_guess, scratch[s], THERMAL_VOLTAGE, v_crit);
        let vbc = limit_junction(vbc_guess, scratch[s + 1], THERMAL_VOLTAGE, v_crit);
        scratch[s] = vbe;
        scratch[s + 1] = vbc;
        scratch[s + 2] = if (vbe - vbe_guess).abs() > 1e-12 || (vbc - vbc_guess).abs() > 1e-12 {
            1.0
        } else {
            0.0
        };
        let ((ic, ib), d) = self.currents(vbe, vbc);
        let pol = self.params.polarity;
        // Terminal currents into the device (actual polarity), linearised in node voltages:
        // dI/dvb = d/dvbe + d/dvbc, dI/dve = -d/dvbe, dI/dvc = -d/dvbc (pol^2 = 1).
        let nodes = [self.collector, self.base, self.emitter];
        // The limited junction voltages replace the guess: linearise about them.
        let (vb, ve, vc) = (
            x[self.base],
            x[self.base] - pol * vbe,
            x[self.base] - pol * vbc,
        );
        let at = [vc, vb, ve];
        for (row, (i, di)) in [(self.collector, (ic, d[0])), (self.base, (ib, d[1]))] {
            let g = [-di[1], di[0] + di[1], -di[0]];
            let i0 = pol * i;
            // Current leaving `row` into the device, returning through the emitter.
            let mut i_eq = i0;
            for k in 0..3 {
                m.add(row, nodes[k], g[k]);
                m.add(self.emitter, nodes[k], -g[k]);
                i_eq -= g[k] * at[k];
            }
            m.b[row] -= i_eq;
            m.b[self.emitter] += i_eq;
        }
        // gmin across both junctions.
        m.conductance(self.base, self.emitter, gmin);
        m.conductance(self.base, self.collector, gmin);
    }

    pub(super) fn limited(&self, scratch: &[f64]) -> bool {
        scratch[self.scratch + 2] != 0.0
    }

    /// Collector current (into the collector pin).
    pub(super) fn collector_current(&self, x: &[f64]) -> f64 {
        let (vbe, vbc) = self.junctions(x);
        self.params.polarity * self.currents(vbe, vbc).0 .0
    }

    pub(super) fn regime(&self, x: &[f64], on_current: f64) -> i8 {
        i8::from(self.collector_current(x).abs() > on_current)
    }
}
