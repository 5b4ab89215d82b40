//! Relay: armature and a change-over contact set (the coil is a separate winding device).
//!
//! The armature picks up when the coil current magnitude rises through `pickup_current`
//! and drops out when it falls through `dropout_current`; the engine locates both
//! crossings. After a pick-up the common contact leaves the normally-closed contact and
//! makes the normally-open one `close_travel` later; after a drop-out it leaves the
//! normally-open contact and makes the normally-closed one `open_travel` later. A contact
//! that makes then bounces `bounce_count` times, evenly within `bounce_time`: open at
//! `(2k + 1) bounce_time / (2 n)`, closed again at `(2k + 2) bounce_time / (2 n)` after
//! making. A new armature change cancels whatever of the previous sequence is still pending.

use super::events::{ContactAction, EventKind, Scheduled};
use super::Mna;
use crate::circuit::RelayParams;

#[derive(Clone, Debug)]
pub(crate) struct Relay {
    /// Branch-current unknown of the coil.
    pub coil_branch: usize,
    pub common: usize,
    pub normally_open: usize,
    pub normally_closed: usize,
    pub params: RelayParams,
}

/// Contact and armature state.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct RelayState {
    /// The armature is picked up.
    pub operated: bool,
    /// Common to normally-open is closed.
    pub normally_open_closed: bool,
    /// Common to normally-closed is closed.
    pub normally_closed_closed: bool,
}

impl RelayState {
    /// A de-energised relay: armature released, normally-closed contact made.
    pub const RELEASED: RelayState = RelayState {
        operated: false,
        normally_open_closed: false,
        normally_closed_closed: true,
    };
}

impl Relay {
    pub(super) fn stamp(&self, m: &mut Mna<'_>, state: RelayState) {
        let p = &self.params;
        let g = |closed: bool| {
            1.0 / if closed {
                p.contact_resistance
            } else {
                p.open_resistance
            }
        };
        m.conductance(
            self.common,
            self.normally_open,
            g(state.normally_open_closed),
        );
        if p.normally_closed_connected {
            m.conductance(
                self.common,
                self.normally_closed,
                g(state.normally_closed_closed),
            );
        }
    }

    pub(super) fn crossing(&self, x: &[f64], state: RelayState) -> f64 {
        let i = x[self.coil_branch].abs();
        if state.operated {
            self.params.dropout_current - i
        } else {
            i - self.params.pickup_current
        }
    }

    /// Flips the armature at `time` and schedules the contact sequence.
    pub(super) fn cross(
        &self,
        device: usize,
        time: f64,
        state: &mut RelayState,
        pending: &mut Vec<Scheduled>,
    ) -> EventKind {
        pending.retain(|s| s.device != device);
        state.operated = !state.operated;
        let p = &self.params;
        let (travel, leave, make, bounce_open) = if state.operated {
            (
                p.close_travel,
                ContactAction::BreakNormallyClosed,
                ContactAction::MakeNormallyOpen,
                ContactAction::BreakNormallyOpen,
            )
        } else {
            (
                p.open_travel,
                ContactAction::BreakNormallyOpen,
                ContactAction::MakeNormallyClosed,
                ContactAction::BreakNormallyClosed,
            )
        };
        let at = time + travel;
        let mut schedule = |time: f64, action: ContactAction| {
            pending.push(Scheduled {
                time,
                device,
                action,
            });
        };
        schedule(at, leave);
        schedule(at, make);
        if p.bounce_count > 0 {
            let slot = p.bounce_time / (2.0 * f64::from(p.bounce_count));
            for k in 0..p.bounce_count {
                let k = f64::from(k);
                schedule(at + (2.0 * k + 1.0) * slot, bounce_open);
                schedule(at + (2.0 * k + 2.0) * slot, make);
            }
        }
        if state.operated {
            EventKind::PickUp
        } else {
            EventKind::DropOut
        }
    }

    /// Applies a scheduled contact change.
    pub(super) fn apply(action: ContactAction, state: &mut RelayState) -> EventKind {
        match action {
            ContactAction::MakeNormallyOpen => {
                state.normally_open_closed = true;
                EventKind::NormallyOpenMade
            }
            ContactAction::BreakNormallyOpen => {
                state.normally_open_closed = false;
                EventKind::NormallyOpenBroken
            }
            ContactAction::MakeNormallyClosed => {
                state.normally_closed_closed = true;
                EventKind::NormallyClosedMade
            }
            ContactAction::BreakNormallyClosed => {
                state.normally_closed_closed = false;
                EventKind::NormallyClosedBroken
            }
        }
    }
}
