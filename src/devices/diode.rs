//! Junction diode: Shockley law, optional exponential reverse breakdown, Newton limiting.
//!
//! Forward: `I = Is (exp(V / (n Vt)) - 1)`.
//! Breakdown (when given): `- Ibv (exp(-(V + BV) / (nb Vt)) - exp(-BV / (nb Vt)))`, where
//! `nb Vt = r_slope Ibv`, so that exactly `Ibv` flows at `V = -BV` with slope resistance
//! `r_slope` there. A conductance `gmin` is added across the junction.
//! Series resistance is a separate conductance to an internal node (see the device enum).

use super::{Mna, SolveContext};
use crate::circuit::{DiodeParams, THERMAL_VOLTAGE};

/// Exponent above which `exp` continues linearly, to keep Newton guesses finite.
const EXP_LIMIT: f64 = 80.0;

/// Exponent below which `exp` is taken as 0 (`exp(-700)` is 1e-304): the library's
/// underflow path is slow, and a reverse junction's or a far breakdown's exponential is far
/// below every other current.
const EXP_FLOOR: f64 = -700.0;

/// `exp(x)` and its derivative, continued linearly above [`EXP_LIMIT`], 0 below
/// [`EXP_FLOOR`].
#[inline]
pub(super) fn limited_exp(x: f64) -> (f64, f64) {
    if x > EXP_LIMIT {
        let e = EXP_LIMIT.exp();
        (e * (1.0 + x - EXP_LIMIT), e)
    } else if x < EXP_FLOOR {
        (0.0, 0.0)
    } else {
        let e = x.exp();
        (e, e)
    }
}

/// The junction's electrical constants, derived once from the part's parameters.
#[derive(Clone, Debug)]
pub(crate) struct Junction {
    is: f64,
    n_vt: f64,
    v_crit: f64,
    /// (breakdown voltage, breakdown current, nb Vt, critical voltage of the mirror law,
    /// exp(-BV / (nb Vt))).
    breakdown: Option<(f64, f64, f64, f64, f64)>,
}

/// The classic p-n junction voltage limiting: a large forward step is replaced by the
/// step the exponential's logarithm would take.
#[inline]
pub(super) fn limit_junction(v_new: f64, v_old: f64, n_vt: f64, v_crit: f64) -> f64 {
    if v_new > v_crit && (v_new - v_old).abs() > 2.0 * n_vt {
        if v_old > 0.0 {
            let arg = 1.0 + (v_new - v_old) / n_vt;
            if arg > 0.0 {
                v_old + n_vt * arg.ln()
            } else {
                v_crit
            }
        } else {
            n_vt * (v_new / n_vt).ln()
        }
    } else {
        v_new
    }
}

impl Junction {
    pub fn new(p: &DiodeParams) -> Self {
        let n_vt = p.emission_coefficient * THERMAL_VOLTAGE;
        let critical = |n_vt: f64, is: f64| n_vt * (n_vt / (std::f64::consts::SQRT_2 * is)).ln();
        Junction {
            is: p.saturation_current,
            n_vt,
            v_crit: critical(n_vt, p.saturation_current),
            breakdown: p.breakdown.as_ref().map(|b| {
                let nb_vt = b.slope_resistance * b.current;
                (
                    b.voltage,
                    b.current,
                    nb_vt,
                    critical(nb_vt, b.current),
                    limited_exp(-b.voltage / nb_vt).0,
                )
            }),
        }
    }

    /// Junction current and its derivative at voltage `v` (without gmin).
    #[inline]
    pub fn current(&self, v: f64) -> (f64, f64) {
        let (e, de) = limited_exp(v / self.n_vt);
        let mut i = self.is * (e - 1.0);
        let mut g = self.is * de / self.n_vt;
        if let Some((bv, ibv, nb_vt, _, e0)) = self.breakdown {
            let (eb, deb) = limited_exp(-(v + bv) / nb_vt);
            i -= ibv * (eb - e0);
            g += ibv * deb / nb_vt;
        }
        (i, g)
    }

    /// Limits the new junction voltage against the previous iteration's, forward and (for
    /// a breakdown junction) mirrored into the reverse direction; returns the voltage to
    /// linearise at and whether a step was cut short (the iteration then cannot be the
    /// last).
    ///
    /// Turning off from forward conduction, plain Newton creeps down by about n Vt per
    /// iteration (the tangent at a high current is steep). Instead the junction jumps to the
    /// voltage that carries the current the tangent predicts: the exponential is convex, so
    /// that voltage lies below the tangent's and never beyond the solution. This lands on
    /// the junction's own curve, so it does not count as a cut.
    #[inline]
    fn limit(&self, v_new: f64, v_old: f64) -> (f64, bool) {
        let mut v = limit_junction(v_new, v_old, self.n_vt, self.v_crit);
        if let Some((bv, _, nb_vt, v_crit, _)) = self.breakdown {
            if v < 0.0 {
                let u = limit_junction(-(v + bv), -(v_old + bv), nb_vt, v_crit);
                v = -u - bv;
            }
        }
        let cut = (v - v_new).abs() > 1e-12;
        if v < v_old && v_old > 0.0 {
            let (e, _) = limited_exp(v_old / self.n_vt);
            let i_old = self.is * (e - 1.0);
            let g_old = self.is * e / self.n_vt;
            let i_predicted = i_old + g_old * (v - v_old);
            if i_predicted > 0.0 {
                let v_current = self.n_vt * (i_predicted / self.is).ln_1p();
                if v_current < v {
                    v = v_current;
                }
            } else {
                // The tangent turns the junction off altogether: drop to a thousandth of
                // its present current (about 7 n Vt lower) at once, rather than creep down
                // n Vt per iteration.
                let v_off = self.n_vt * (1e-3 * i_old.max(0.0) / self.is).ln_1p();
                if v_off < v {
                    v = v_off;
                }
            }
        }
        (v, cut)
    }

    /// Where Newton limiting starts for a step (see `Device::begin_newton`).
    pub fn limiting_anchor(&self, v_accepted: f64, v_guess: f64) -> f64 {
        if v_guess > self.v_crit && v_guess > v_accepted {
            v_accepted
        } else {
            v_guess
        }
    }

    /// Stamps the linearised junction between `p` (anode side) and `n` (cathode).
    /// Scratch: `[limited voltage, conductance, equivalent current, 1 if limited]`.
    #[inline]
    pub fn stamp(
        &self,
        m: &mut Mna<'_>,
        ctx: &SolveContext,
        p: usize,
        n: usize,
        x: &[f64],
        scratch: &mut [f64],
    ) {
        let v_guess = x[p] - x[n];
        let (v, cut) = self.limit(v_guess, scratch[0]);
        let (i, g) = self.current(v);
        let g = g + ctx.gmin;
        let i = i + ctx.gmin * v;
        let i_eq = i - g * v;
        m.conductance(p, n, g);
        m.current(p, n, i_eq);
        scratch[0] = v;
        scratch[1] = g;
        scratch[2] = i_eq;
        scratch[3] = if cut { 1.0 } else { 0.0 };
    }

    /// Whether the last linearisation predicts the current at `v` well enough.
    pub fn converged(&self, v: f64, scratch: &[f64], gmin: f64, reltol: f64, abstol: f64) -> bool {
        if scratch[3] != 0.0 {
            return false;
        }
        let predicted = scratch[1] * v + scratch[2];
        let actual = self.current(v).0 + gmin * v;
        (predicted - actual).abs() <= reltol * predicted.abs().max(actual.abs()) + abstol
    }
}
