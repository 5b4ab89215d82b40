//! Behavioural linear regulator (series pass element between input and output).
//!
//! With voltages measured from the `common` pin, the pass current `j` (a branch unknown,
//! from the input pin to the output pin) satisfies
//!
//! ```text
//! vout = target(vin) - V_pass(j)
//! target = Vset - d ln(1 + exp((Vset - (vin - Vdrop)) / d))      d = 20 mV
//!        ~ min(Vset, vin - Vdrop), smoothly
//! V_pass(j) = R_out j - R_block softplus(-j) + R_block softplus(j - I_limit)
//! ```
//!
//! so the pass element is `R_out` while it sources between 0 and `I_limit`, and a steep
//! `R_block` (100 kohm) outside: it hardly sinks current and hardly exceeds its limit. Written
//! this way (voltage as a function of current) the characteristic has no flat region for
//! Newton-Raphson to stall on. The input current follows the load current; the quiescent
//! current flows from the input to the common pin once the input is above about 1 V
//! (smoothly switched on).

use super::Mna;
use crate::circuit::RegulatorParams;

/// Softness of the dropout corner, volts.
const DROPOUT_SOFTNESS: f64 = 0.02;
/// Slope of the pass element outside its sourcing range, ohms.
const BLOCKING_RESISTANCE: f64 = 1e5;

#[derive(Clone, Debug)]
pub(crate) struct Regulator {
    pub input: usize,
    pub output: usize,
    pub common: usize,
    /// Branch unknown: the pass current from input to output.
    pub branch: usize,
    pub params: RegulatorParams,
}

/// `d ln(1 + exp(x / d))` and its derivative, overflow-safe.
fn softplus(x: f64, d: f64) -> (f64, f64) {
    let z = x / d;
    if z > 30.0 {
        (x, 1.0)
    } else if z < -700.0 {
        // Below 1e-304: zero, without the library's slow underflow path.
        (0.0, 0.0)
    } else if z < -30.0 {
        (d * z.exp(), z.exp())
    } else {
        let e = z.exp();
        (d * e.ln_1p(), e / (1.0 + e))
    }
}

impl Regulator {
    /// (target, d target / d vin) for an input `vin` above common.
    fn target(&self, vin: f64) -> (f64, f64) {
        let p = &self.params;
        let (sp, dsp) = softplus(
            p.output_voltage - (vin - p.dropout_voltage),
            DROPOUT_SOFTNESS,
        );
        (p.output_voltage - sp, dsp)
    }

    /// (`V_pass`, d `V_pass` / dj).
    fn pass_drop(&self, j: f64) -> (f64, f64) {
        let p = &self.params;
        let softness = 1e-4 * p.current_limit;
        let (reverse, dreverse) = softplus(-j, softness);
        let (over, dover) = softplus(j - p.current_limit, softness);
        (
            p.output_resistance * j - BLOCKING_RESISTANCE * reverse + BLOCKING_RESISTANCE * over,
            p.output_resistance + BLOCKING_RESISTANCE * dreverse + BLOCKING_RESISTANCE * dover,
        )
    }

    /// (quiescent current, d/dvin) for an input `vin` above common.
    fn quiescent(&self, vin: f64) -> (f64, f64) {
        let t = ((vin - 1.0) / 0.25).tanh();
        let iq = self.params.quiescent_current;
        (iq * 0.5 * (1.0 + t), iq * 0.5 * (1.0 - t * t) / 0.25)
    }

    pub(super) fn stamp(&self, m: &mut Mna<'_>, x: &[f64]) {
        let c = x[self.common];
        let (vin, vout, j) = (x[self.input] - c, x[self.output] - c, x[self.branch]);
        // Pass current leaves the input node and enters the output node.
        m.add(self.input, self.branch, 1.0);
        m.add(self.output, self.branch, -1.0);
        // Branch row: F = vout + V_pass(j) - target(vin) = 0, linearised.
        let (target, dtarget) = self.target(vin);
        let (drop, ddrop) = self.pass_drop(j);
        let f0 = vout + drop - target;
        let row = self.branch;
        // dF/dv_out = 1, dF/dv_in = -dtarget, dF/dv_common = -1 + dtarget, dF/dj = ddrop.
        let terms = [
            (self.output, 1.0),
            (self.input, -dtarget),
            (self.common, -1.0 + dtarget),
            (self.branch, ddrop),
        ];
        let mut rhs = -f0;
        for (node, g) in terms {
            m.add(row, node, g);
            rhs += g * x[node];
        }
        m.b[row] += rhs;
        // Quiescent current from input to common.
        let (q, dq) = self.quiescent(vin);
        let nodes = [self.input, self.common];
        m.nonlinear_current(self.input, self.common, q, &nodes, &[dq, -dq], x);
    }

    /// 0 off, 1 regulating, 2 in dropout, 3 current-limited.
    pub(super) fn regime(&self, x: &[f64], on_current: f64) -> i8 {
        let p = &self.params;
        let vin = x[self.input] - x[self.common];
        let j = x[self.branch];
        if j < on_current {
            0
        } else if j > 0.99 * p.current_limit {
            3
        } else if vin - p.dropout_voltage < p.output_voltage - 3.0 * DROPOUT_SOFTNESS {
            2
        } else {
            1
        }
    }

    /// Current into the input pin.
    pub(super) fn input_current(&self, x: &[f64]) -> f64 {
        x[self.branch] + self.quiescent(x[self.input] - x[self.common]).0
    }
}
