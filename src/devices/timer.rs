//! Behavioural timer in the classic arrangement: two comparators at one third and two
//! thirds of the supply, a set-reset flip-flop, an output stage and a discharge switch.
//!
//! With voltages from `supply_minus` and `vs` the supply:
//! - the flip-flop sets (output high, discharge open) when `trigger < vs/3`, the reset pin
//!   is above `reset_voltage` and the supply is above 1 V;
//! - it resets (output low, discharge closed to `supply_minus`) when `threshold > 2 vs/3`
//!   and the trigger is not active, or when the reset pin falls below `reset_voltage`.
//!
//! The output is `vs - high_headroom` or `low_headroom` behind `output_resistance`; the
//! engine locates every flip-flop change. The supply draws `supply_current` once the supply
//! exceeds 2 V (ramped in from 0 V).

use super::events::EventKind;
use super::Mna;
use crate::circuit::TimerParams;

#[derive(Clone, Debug)]
pub(crate) struct Timer {
    pub supply_plus: usize,
    pub supply_minus: usize,
    pub trigger: usize,
    pub threshold: usize,
    pub reset: usize,
    pub output: usize,
    pub discharge: usize,
    pub params: TimerParams,
}

/// Off conductance of the discharge switch, siemens.
const DISCHARGE_OFF: f64 = 1e-9;

impl Timer {
    pub(super) fn stamp(&self, m: &mut Mna<'_>, x: &[f64], set: bool) {
        let p = &self.params;
        let g = 1.0 / p.output_resistance;
        m.add(self.output, self.output, g);
        // Both supply entries are touched in either state, so the matrix pattern does not
        // depend on the flip-flop.
        if set {
            m.add(self.output, self.supply_plus, -g);
            m.add(self.output, self.supply_minus, 0.0);
            m.b[self.output] -= g * p.high_headroom;
        } else {
            m.add(self.output, self.supply_plus, 0.0);
            m.add(self.output, self.supply_minus, -g);
            m.b[self.output] += g * p.low_headroom;
        }
        let g_dis = if set {
            DISCHARGE_OFF
        } else {
            1.0 / p.discharge_resistance
        };
        m.conductance(self.discharge, self.supply_minus, g_dis);
        // Supply current, ramped in over the first 2 V of supply.
        let vs = x[self.supply_plus] - x[self.supply_minus];
        let (i, di) = if vs <= 0.0 {
            (0.0, 0.0)
        } else if vs < 2.0 {
            (p.supply_current * vs / 2.0, p.supply_current / 2.0)
        } else {
            (p.supply_current, 0.0)
        };
        let nodes = [self.supply_plus, self.supply_minus];
        m.nonlinear_current(
            self.supply_plus,
            self.supply_minus,
            i,
            &nodes,
            &[di, -di],
            x,
        );
    }

    /// Positive once the flip-flop must change state.
    pub(super) fn crossing(&self, x: &[f64], set: bool) -> f64 {
        let p = &self.params;
        let sn = x[self.supply_minus];
        let vs = x[self.supply_plus] - sn;
        let trigger = x[self.trigger] - sn;
        let threshold = x[self.threshold] - sn;
        let reset = x[self.reset] - sn;
        let trigger_active = vs / 3.0 - trigger;
        if set {
            let threshold_reset = (threshold - 2.0 * vs / 3.0).min(-trigger_active);
            threshold_reset.max(p.reset_voltage - reset)
        } else {
            trigger_active.min(reset - p.reset_voltage).min(vs - 1.0)
        }
    }

    pub(super) fn cross(set: &mut bool) -> EventKind {
        *set = !*set;
        if *set {
            EventKind::TimerSet
        } else {
            EventKind::TimerReset
        }
    }

    /// Current into the output pin.
    pub(super) fn output_current(&self, x: &[f64], set: bool) -> f64 {
        let p = &self.params;
        let target = if set {
            x[self.supply_plus] - p.high_headroom
        } else {
            x[self.supply_minus] + p.low_headroom
        };
        (target - x[self.output]) / p.output_resistance
    }
}
