//! Behavioural linear regulator (series pass element between input and output).
//!
//! With voltages measured from the `common` pin:
//!
//! ```text
//! target = Vset - d ln(1 + exp((Vset - (vin - Vdrop)) / d))      d = 20 mV
//!        ~ min(Vset, vin - Vdrop), smoothly
//! I_pass = clamp((target - vout) / R_out, 0, I_limit)             (smoothed corners)
//! ```
//!
//! `I_pass` flows from the input pin to the output pin: the input current follows the load
//! current and the regulator only sources. The quiescent current flows from the input to the
//! common pin once the input is above about 1 V (smoothly switched on).

use super::Mna;
use crate::circuit::RegulatorParams;

/// Softness of the dropout corner, volts.
const DROPOUT_SOFTNESS: f64 = 0.02;
/// Softness of the zero-current corner, amperes.
const ZERO_SOFTNESS: f64 = 1e-6;

#[derive(Clone, Debug)]
pub(crate) struct Regulator {
    pub input: usize,
    pub output: usize,
    pub common: usize,
    pub params: RegulatorParams,
}

/// `d ln(1 + exp(x / d))` and its derivative, overflow-safe.
fn softplus(x: f64, d: f64) -> (f64, f64) {
    let z = x / d;
    if z > 30.0 {
        (x, 1.0)
    } else if z < -30.0 {
        (d * z.exp(), z.exp())
    } else {
        let e = z.exp();
        (d * e.ln_1p(), e / (1.0 + e))
    }
}

impl Regulator {
    /// (pass current, d/dvin, d/dvout, quiescent current, dq/dvin), voltages from common.
    fn evaluate(&self, vin: f64, vout: f64) -> (f64, f64, f64, f64, f64) {
        let p = &self.params;
        let (sp, dsp) = softplus(
            p.output_voltage - (vin - p.dropout_voltage),
            DROPOUT_SOFTNESS,
        );
        let target = p.output_voltage - sp;
        let dtarget_dvin = dsp;
        let raw = (target - vout) / p.output_resistance;
        let (low, dlow) = softplus(raw, ZERO_SOFTNESS);
        let limit_softness = 1e-3 * p.current_limit;
        let (over, dover) = softplus(low - p.current_limit, limit_softness);
        let i = low - over;
        let di_draw = dlow * (1.0 - dover);
        let di_dvin = di_draw * dtarget_dvin / p.output_resistance;
        let di_dvout = -di_draw / p.output_resistance;
        // Quiescent current: switched on smoothly around 1 V of input.
        let t = ((vin - 1.0) / 0.25).tanh();
        let q = p.quiescent_current * 0.5 * (1.0 + t);
        let dq = p.quiescent_current * 0.5 * (1.0 - t * t) / 0.25;
        (i, di_dvin, di_dvout, q, dq)
    }

    pub(super) fn stamp(&self, m: &mut Mna<'_>, x: &[f64]) {
        let c = x[self.common];
        let (vin, vout) = (x[self.input] - c, x[self.output] - c);
        let (i, di_in, di_out, q, dq) = self.evaluate(vin, vout);
        let nodes = [self.input, self.output, self.common];
        m.nonlinear_current(
            self.input,
            self.output,
            i,
            &nodes,
            &[di_in, di_out, -(di_in + di_out)],
            x,
        );
        m.nonlinear_current(self.input, self.common, q, &nodes, &[dq, 0.0, -dq], x);
    }

    /// 0 off, 1 regulating, 2 in dropout, 3 current-limited.
    pub(super) fn regime(&self, x: &[f64], on_current: f64) -> i8 {
        let p = &self.params;
        let c = x[self.common];
        let (vin, vout) = (x[self.input] - c, x[self.output] - c);
        let (i, ..) = self.evaluate(vin, vout);
        if i < on_current {
            0
        } else if i > 0.99 * p.current_limit {
            3
        } else if vin - p.dropout_voltage < p.output_voltage - 3.0 * DROPOUT_SOFTNESS {
            2
        } else {
            1
        }
    }

    /// Current into the input pin.
    pub(super) fn input_current(&self, x: &[f64]) -> f64 {
        let c = x[self.common];
        let (i, _, _, q, _) = self.evaluate(x[self.input] - c, x[self.output] - c);
        i + q
    }
}
