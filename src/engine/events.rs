//! Discrete events and the observer a run reports to.

use super::*;

/// A discrete state change.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum EventKind {
    /// A voltage-controlled switch closed.
    SwitchClosed,
    /// A voltage-controlled switch opened.
    SwitchOpened,
    /// A relay armature picked up (coil current rose through the pick-up current).
    PickUp,
    /// A relay armature dropped out (coil current fell through the drop-out current).
    DropOut,
    /// A relay's normally-open contact made (closed).
    NormallyOpenMade,
    /// A relay's normally-open contact broke (opened).
    NormallyOpenBroken,
    /// A relay's normally-closed contact made.
    NormallyClosedMade,
    /// A relay's normally-closed contact broke.
    NormallyClosedBroken,
    /// A timer's flip-flop set (output high).
    TimerSet,
    /// A timer's flip-flop reset (output low).
    TimerReset,
}

/// A contact change a relay schedules after an armature movement.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum ContactAction {
    /// Close common to normally-open.
    MakeNormallyOpen,
    /// Open common to normally-open.
    BreakNormallyOpen,
    /// Close common to normally-closed.
    MakeNormallyClosed,
    /// Open common to normally-closed.
    BreakNormallyClosed,
}

/// A discrete change scheduled for a later instant (a breakpoint the stepper lands on).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Scheduled {
    /// When, seconds.
    pub time: f64,
    /// The device it belongs to.
    pub device: usize,
    /// What happens.
    pub action: ContactAction,
}

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
