//! Discrete events and the observer a run reports to.

use super::*;

pub use crate::devices::events::{ContactAction, EventKind, Scheduled};

/// Scheduled changes a state can hold without allocating.
pub(crate) const PENDING_CAPACITY: usize = 256;

/// A discrete event with its exact time.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct DiscreteEvent {
    /// When it happened, seconds (located to within [`Settings::event_tolerance_s`]).
    pub time: f64,
    /// Index of the part.
    pub part: usize,
    /// What happened.
    pub kind: EventKind,
}

/// Receives accepted steps and discrete events. `()` ignores both.
pub trait Observer {
    /// Called after each accepted step (and once for the initial state by
    /// [`Simulator::start`] callers that want it).
    fn step(&mut self, _network: &Network, _state: &SimState) {}
    /// Called when a device changes its discrete state.
    fn event(&mut self, _network: &Network, _event: &DiscreteEvent) {}
}

impl Observer for () {}
