//! The discrete changes devices make: the kinds of event a run reports, and the contact
//! changes a relay schedules. Defined with the devices (the engine re-exports them) so that
//! the devices import nothing from the engine.

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

impl EventKind {
    /// The event in words a user reads (`armature picked up`).
    pub fn describe(self) -> &'static str {
        match self {
            EventKind::SwitchClosed => "switch closed",
            EventKind::SwitchOpened => "switch opened",
            EventKind::PickUp => "armature picked up",
            EventKind::DropOut => "armature dropped out",
            EventKind::NormallyOpenMade => "normally-open contact made",
            EventKind::NormallyOpenBroken => "normally-open contact broke",
            EventKind::NormallyClosedMade => "normally-closed contact made",
            EventKind::NormallyClosedBroken => "normally-closed contact broke",
            EventKind::TimerSet => "timer output set (high)",
            EventKind::TimerReset => "timer output reset (low)",
        }
    }
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
