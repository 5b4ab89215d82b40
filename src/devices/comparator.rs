//! Behavioural comparator.
//!
//! The output target follows a smooth high-gain transfer between rails taken from the
//! supply pins:
//!
//! ```text
//! v_low  = v(supply_minus) + low_headroom
//! span   = smooth_max(v(supply_plus) - high_headroom - v_low, 0)
//! s      = clamp(2 (x - v_low) / span - 1, -1, 1)       (present output state, -1 .. 1)
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
//! by half the band against the present output, a Schmitt trigger: with the output at a
//! rail `s` is exactly -1 or +1 at any supply, so the output rises at
//! `input_offset + hysteresis/2` and falls at `input_offset - hysteresis/2`.

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
        let s = (2.0 * (x - v_low) / span - 1.0).clamp(-1.0, 1.0);
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

    /// (target, d target / d pin) for the pins in [`Comparator::nodes`] order: the
    /// derivatives of the module's equations in closed form.
    fn transfer_gradient(&self, v: [f64; 5]) -> (f64, [f64; 5]) {
        let p = &self.params;
        let [vp, vm, sp, sn, x] = v;
        let v_low = sn + p.low_headroom;
        let d = sp - p.high_headroom - v_low;
        let root = (d * d + SPAN_SOFTNESS * SPAN_SOFTNESS).sqrt();
        let span = 0.5 * (d + root);
        // d span / d sp (and minus d span / d sn).
        let sigma = 0.5 * (1.0 + d / root);
        let norm = span + SPAN_FLOOR;
        let s_raw = 2.0 * (x - v_low) / span - 1.0;
        let s = s_raw.clamp(-1.0, 1.0);
        // Beyond the rails (a collapsing supply) the state is clamped: no derivative.
        let s_free = f64::from(u8::from(s_raw.abs() < 1.0));
        let e = vp - vm - p.input_offset + 0.5 * p.hysteresis * s;
        let u = 2.0 * p.gain * e / norm;
        let t = u.tanh();
        let target = v_low + span * 0.5 * (1.0 + t);
        // Partials with respect to (vp, vm, sp, sn, x).
        let dnorm = [0.0, 0.0, sigma, -sigma, 0.0];
        let dvlow = [0.0, 0.0, 0.0, 1.0, 0.0];
        let mut grad = [0.0; 5];
        for k in 0..5 {
            let dx = if k == 4 { 1.0 } else { 0.0 };
            let ds = s_free
                * (2.0 * (dx - dvlow[k]) / span - 2.0 * (x - v_low) * dnorm[k] / (span * span));
            let de = [1.0, -1.0, 0.0, 0.0, 0.0][k] + 0.5 * p.hysteresis * ds;
            let du = 2.0 * p.gain * (de / norm - e * dnorm[k] / (norm * norm));
            grad[k] = dvlow[k] + dnorm[k] * 0.5 * (1.0 + t) + span * 0.5 * (1.0 - t * t) * du;
        }
        (target, grad)
    }

    pub(super) fn stamp(&self, m: &mut Mna<'_>, x: &[f64]) {
        let v = self.pins(x);
        let (f0, grad) = self.transfer_gradient(v);
        let mut rhs = f0;
        for (k, node) in self.nodes().into_iter().enumerate() {
            // The lag node's equation: x + tau dx/dt - target(v) = 0.
            m.add(self.lag, node, -grad[k]);
            rhs -= grad[k] * v[k];
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

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_closed_form_gradient_matches_central_differences() {
        let mut params = ComparatorParams {
            low_headroom: 0.05,
            high_headroom: 1.5,
            gain: 1e3,
            output_resistance: 100.0,
            response_time: 1e-6,
            input_offset: 0.01,
            hysteresis: 0.2,
        };
        for hysteresis in [0.0, 0.2] {
            params.hysteresis = hysteresis;
            let c = Comparator {
                plus: 0,
                minus: 1,
                output: 2,
                supply_plus: 3,
                supply_minus: 4,
                lag: 5,
                params: params.clone(),
            };
            // Around the threshold, powered; and with the supply collapsing.
            for v in [
                [2.5, 2.4999, 12.0, 0.0, 6.0],
                [2.5, 2.5003, 12.0, 0.1, 3.0],
                [1.0, 0.2, 1.6, 0.0, 0.05],
                [3.0, 3.0, 0.5, 0.0, 0.0],
            ] {
                let (f0, grad) = c.transfer_gradient(v);
                assert_eq!(f0, c.transfer(v[0], v[1], v[2], v[3], v[4]).0);
                for k in 0..5 {
                    let h = 1e-7 * (1.0 + v[k].abs());
                    let (mut hi, mut lo) = (v, v);
                    hi[k] += h;
                    lo[k] -= h;
                    let f = |w: [f64; 5]| c.transfer(w[0], w[1], w[2], w[3], w[4]).0;
                    let numeric = (f(hi) - f(lo)) / (2.0 * h);
                    assert!(
                        (grad[k] - numeric).abs() <= 1e-5 * (1.0 + numeric.abs()),
                        "pin {k} at {v:?}: {} vs {numeric}",
                        grad[k]
                    );
                }
            }
        }
    }
}
