//! Independent sources.
//!
//! A voltage source has a branch current `j` flowing from its plus pin through the source
//! to its minus pin, and the constraint `v_plus - v_minus = V(t)`. A current source pushes
//! `I(t)` through itself from its `from` pin to its `to` pin.

use super::{Mna, SolveContext};
use crate::waveform::Waveform;

pub(super) fn stamp_voltage(
    m: &mut Mna<'_>,
    ctx: &SolveContext,
    p: usize,
    n: usize,
    branch: usize,
    waveform: &Waveform,
) {
    m.branch_incidence(p, n, branch);
    m.b[branch] += ctx.source(waveform);
}
