//! Behavioural comparator.
//!
//! The output target follows a smooth high-gain transfer between rails taken from the
//! supply pins:
//!
//! ```text
//! v_low  = v(supply_minus) + low_headroom
//! span   = smooth_max(v(supply_plus) - high_headroom - v_low, 0)
//! s      = 2 (x - v_low) / (span + 0.1 V) - 1          (present output state, -1 .. 1)
//! thr    = input_offset - (hysteresis / 2) s
//! u      = 2 gain (v(plus) - v(minus) - thr) / (span + 0.1 V)
//! target = v_low + span (1 + tanh u) / 2
//! ```
//!
//! The slope at the threshold is `gain`. A first-order lag (time constant
//! `response_time`) on an internal node `x` follows the target: `tau dx/dt + x = target`.
//! The output pin is driven from `x` through `output_resistance`; the output current and the
//! comparator's own supply current are not drawn from the supply pins (a simplification:
//! both are small beside the circuits it drives). With `hysteresis` > 0 the threshold moves
//! by half the band against the present output, a Schmitt trigger.

use super::Mna;
use crate::circuit::ComparatorParams;

/// Added to the span in the normalisations so an unpowered comparator stays smooth.
const SPAN_FLOOR: f64 = 0.1;
/// Softness of the rail-span clamp at zero, volts.
const SPAN_SOFTNESS: f64 = 0.01;

#[derive(Clone, Debug)]
pub(crate) struct Comparator {
    pub plus: usize,
    pub minus: usize,
    pub output: usize,
    pub supply_plus: usize,
    pub supply_minus: usize,
    /// Internal lag node.
    pub lag: usize,
    pub params: ComparatorParams,
}

impl Comparator {
    /// (target, u) for the given pin voltages and lag state.
    fn transfer(&self, vp: f64, vm: f64, sp: f64, sn: f64, x: f64) -> (f64, f64) {
        let p = &self.params;
        let v_low = sn + p.low_headroom;
        let d = sp - p.high_headroom - v_low;
        let span = 0.5 * (d + (d * d + SPAN_SOFTNESS * SPAN_SOFTNESS).sqrt());
        let norm = span + SPAN_FLOOR;
        let s = 2.0 * (x - v_low) / norm - 1.0;
        let threshold = p.input_offset - 0.5 * p.hysteresis * s;
        let u = 2.0 * p.gain * (vp - vm - threshold) / norm;
        (v_low + span * 0.5 * (1.0 + u.tanh()), u)
    }

    fn pins(&self, x: &[f64]) -> [f64; 5] {
        [
            x[self.plus],
            x[self.minus],
            x[self.supply_plus],
            x[self.supply_minus],
            x[self.lag],
        ]
    }

    fn nodes(&self) -> [usize; 5] {
        [
            self.plus,
            self.minus,
            self.supply_plus,
            self.supply_minus,
            self.lag,
        ]
    }

    pub(super) fn stamp(&self, m: &mut Mna<'_>, x: &[f64]) {
        let v = self.pins(x);
        let (f0, _) = self.transfer(v[0], v[1], v[2], v[3], v[4]);
        // Partial derivatives by central differences: the transfer is smooth and cheap, and
        // five inputs make the closed forms long and error-prone.
        let mut rhs = f0;
        for (k, node) in self.nodes().into_iter().enumerate() {
            let step = 1e-7 * (1.0 + v[k].abs());
            let mut hi = v;
            let mut lo = v;
            hi[k] += step;
            lo[k] -= step;
            let g = (self.transfer(hi[0], hi[1], hi[2], hi[3], hi[4]).0
                - self.transfer(lo[0], lo[1], lo[2], lo[3], lo[4]).0)
                / (2.0 * step);
            // The lag node's equation: x + tau dx/dt - target(v) = 0.
            m.add(self.lag, node, -g);
            rhs -= g * v[k];
        }
        m.b[self.lag] += rhs;
        // Output: current out of the output pin into the comparator = (v_out - x) / R_out.
        let g = 1.0 / self.params.output_resistance;
        m.add(self.output, self.output, g);
        m.add(self.output, self.lag, -g);
    }

    /// -1 output low, +1 high, 0 in the linear region.
    pub(super) fn regime(&self, x: &[f64]) -> i8 {
        let v = self.pins(x);
        let (_, u) = self.transfer(v[0], v[1], v[2], v[3], v[4]);
        if u > 2.0 {
            1
        } else if u < -2.0 {
            -1
        } else {
            0
        }
    }

    /// Output current into the output pin.
    pub(super) fn current(&self, x: &[f64]) -> f64 {
        (x[self.lag] - x[self.output]) / self.params.output_resistance
    }
}
