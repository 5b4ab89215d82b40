//! Square-law MOSFET (Shichman-Hodges, IEEE JSSC SC-3(3), 1968).
//!
//! For an N channel with `vds >= 0`:
//!
//! ```text
//! cutoff     vgs <= Vth:             Id = 0
//! saturation vds >= vgs - Vth:       Id = (K/2)(vgs - Vth)^2 (1 + lambda vds)
//! triode     otherwise:              Id = K((vgs - Vth) vds - vds^2 / 2)(1 + lambda vds)
//! ```
//!
//! With `vds < 0` drain and source swap roles. A P channel is the N channel with every
//! voltage and current negated (`Vth` is given as a magnitude). The body diode is a separate
//! junction (source to drain for N, drain to source for P).

use super::Mna;
use crate::circuit::MosfetParams;

#[derive(Clone, Debug)]
pub(crate) struct Mosfet {
    pub drain: usize,
    pub gate: usize,
    pub source: usize,
    pub params: MosfetParams,
}

/// N-channel drain current and its derivatives (gm = dI/dvgs, gds = dI/dvds), vds >= 0.
fn square_law(p: &MosfetParams, vgs: f64, vds: f64) -> (f64, f64, f64) {
    let vov = vgs - p.threshold_voltage;
    if vov <= 0.0 {
        return (0.0, 0.0, 0.0);
    }
    let k = p.transconductance;
    let clm = 1.0 + p.channel_length_modulation * vds;
    if vds >= vov {
        let i0 = 0.5 * k * vov * vov;
        (i0 * clm, k * vov * clm, i0 * p.channel_length_modulation)
    } else {
        let i0 = k * (vov * vds - 0.5 * vds * vds);
        (
            i0 * clm,
            k * vds * clm,
            k * (vov - vds) * clm + i0 * p.channel_length_modulation,
        )
    }
}

impl Mosfet {
    /// Current from drain to source and its partial derivatives with respect to
    /// (`v_drain`, `v_gate`, `v_source`).
    pub(super) fn evaluate(&self, x: &[f64]) -> (f64, [f64; 3]) {
        let pol = self.params.polarity;
        // Work in N-channel terms on polarity-scaled voltages.
        let (vd, vg, vs) = (
            pol * x[self.drain],
            pol * x[self.gate],
            pol * x[self.source],
        );
        let (i, g) = if vd >= vs {
            let (i, gm, gds) = square_law(&self.params, vg - vs, vd - vs);
            (i, [gds, gm, -(gm + gds)])
        } else {
            // Reversed: the source acts as drain.
            let (i, gm, gds) = square_law(&self.params, vg - vd, vs - vd);
            (-i, [gm + gds, -gm, -gds])
        };
        // I_actual(v) = pol * I_n(pol v): derivatives keep their sign (pol^2 = 1).
        (pol * i, g)
    }

    pub(super) fn stamp(&self, m: &mut Mna<'_>, x: &[f64]) {
        let (i0, g) = self.evaluate(x);
        let nodes = [self.drain, self.gate, self.source];
        m.nonlinear_current(self.drain, self.source, i0, &nodes, &g, x);
    }

    pub(super) fn regime(&self, x: &[f64], on_current: f64) -> i8 {
        i8::from(self.evaluate(x).0.abs() > on_current)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn params() -> MosfetParams {
        MosfetParams {
            polarity: 1.0,
            threshold_voltage: 2.0,
            transconductance: 0.5,
            channel_length_modulation: 0.0,
            body_diode: None,
        }
    }

    #[test]
    fn derivatives_match_finite_differences() {
        let mut p = params();
        p.channel_length_modulation = 0.02;
        for &(vgs, vds) in &[(3.0, 5.0), (3.0, 0.4), (4.5, 1.0), (2.5, 0.1)] {
            let (_, gm, gds) = square_law(&p, vgs, vds);
            let h = 1e-6;
            let gm_fd =
                (square_law(&p, vgs + h, vds).0 - square_law(&p, vgs - h, vds).0) / (2.0 * h);
            let gds_fd =
                (square_law(&p, vgs, vds + h).0 - square_law(&p, vgs, vds - h).0) / (2.0 * h);
            assert!((gm - gm_fd).abs() < 1e-6 * (1.0 + gm.abs()), "{vgs} {vds}");
            assert!(
                (gds - gds_fd).abs() < 1e-6 * (1.0 + gds.abs()),
                "{vgs} {vds}"
            );
        }
    }
}
