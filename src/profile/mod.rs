//! Supply disturbance profiles: dips, short interruptions, voltage variations, swells, slow
//! ramps and sequences of them, as an RMS envelope over the nominal sine.
//!
//! A profile is a list of steps in time order, each relative to the end of the previous
//! one. It compiles into an [`Envelope`]: the ratio of the RMS level to nominal as a
//! piecewise-linear function of the time since the first event's onset. Abrupt changes take
//! a finite edge time (default [`DEFAULT_EDGE_S`]).
//!
//! The compact form (see `docs/events.md`) is one item or several joined by `;`:
//!
//! ```text
//! dip:40%:10cyc@90        residual 40% for 10 cycles, starting at 90 degrees
//! interrupt:250cyc        residual 0% for 250 cycles
//! swell:120%:25cyc        120% for 25 cycles
//! vary:70%:0cyc/1cyc/25cyc   down to 70% in 0 cycles, hold 1 cycle, back up in 25 cycles
//! ramp:100%-65%:20s       from 100% to 65% over 20 s (and stay there)
//! gap:20cyc               nominal supply between two events of a sequence
//! ```

use crate::units::{parse_value, Quantity};
use std::fmt;
use std::sync::Arc;

mod envelope;
mod file;
mod presets;
mod spec;
pub use envelope::*;
pub use file::*;
pub use presets::*;
pub use spec::*;

/// Edge (rise and fall) time of an abrupt change, seconds: the IEC 61000-4-11 test
/// generator must switch within 1 to 5 us into a resistive load; we use the slow end.
pub const DEFAULT_EDGE_S: f64 = 5e-6;

/// A duration, in mains cycles or seconds.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Duration {
    /// A number of mains cycles (fractions allowed, e.g. 0.5).
    Cycles(f64),
    /// Seconds.
    Seconds(f64),
}

impl Duration {
    /// The duration in seconds at mains frequency `frequency_hz`.
    pub fn seconds(self, frequency_hz: f64) -> f64 {
        match self {
            Duration::Cycles(n) => n / frequency_hz,
            Duration::Seconds(s) => s,
        }
    }
}

impl fmt::Display for Duration {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        // At most four decimals (a tenth of a microsecond in milliseconds): a duration
        // found by bisection reads 545.5595ms, not every digit of its binary value.
        let short = |x: f64| {
            let text = format!("{x:.4}");
            let text = text.trim_end_matches('0').trim_end_matches('.');
            text.to_string()
        };
        match *self {
            Duration::Cycles(n) => write!(f, "{}cyc", short(n)),
            Duration::Seconds(s) if s < 1.0 => write!(f, "{}ms", short(s * 1e3)),
            Duration::Seconds(s) => write!(f, "{}s", short(s)),
        }
    }
}

/// One step of a profile.
#[derive(Clone, Debug, PartialEq)]
pub enum Step {
    /// The supply falls to `residual` (fraction of nominal) for `duration`.
    Dip {
        /// Residual voltage, fraction of nominal (0.4 for 40%).
        residual: f64,
        /// Time at the residual level.
        duration: Duration,
    },
    /// The supply rises to `level` (fraction of nominal, above 1) for `duration`.
    Swell {
        /// Level, fraction of nominal.
        level: f64,
        /// Time at the level.
        duration: Duration,
    },
    /// A gradual variation: down to `residual` over `decrease`, held for `hold`, back to
    /// nominal over `increase`.
    Variation {
        /// Reduced level, fraction of nominal.
        residual: f64,
        /// Time to go down (0 for abrupt).
        decrease: Duration,
        /// Time at the reduced level.
        hold: Duration,
        /// Time to come back up.
        increase: Duration,
    },
    /// A slow linear ramp of the level from `from` to `to` over `duration`; the supply then
    /// stays at `to`.
    Ramp {
        /// Starting level, fraction of nominal.
        from: f64,
        /// Final level, fraction of nominal.
        to: f64,
        /// Ramp time.
        duration: Duration,
    },
    /// Nominal supply for `duration` (between events of a sequence).
    Gap {
        /// Time at nominal.
        duration: Duration,
    },
}

/// A disturbance profile: steps in order, the phase angle of the first onset and the edge
/// time of abrupt changes.
#[derive(Clone, Debug, PartialEq)]
pub struct Profile {
    /// Steps in time order.
    pub steps: Vec<Step>,
    /// Phase angle of the mains sine at the first onset, degrees (0 = rising zero crossing).
    pub phase_deg: f64,
    /// Rise and fall time of abrupt changes, seconds.
    pub edge_s: f64,
}

/// A step whose duration makes no event: zero, or too short to reach its level through the
/// edges.
#[derive(Clone, Debug, PartialEq, thiserror::Error)]
pub enum ProfileError {
    /// A step lasts no time at all.
    #[error("step {step} (`{spec}`) lasts no time: give a duration above 0")]
    Empty {
        /// The step, counted from 1.
        step: usize,
        /// The step in the compact form.
        spec: String,
    },
    /// A step is shorter than the edge the supply takes to reach its level, so the level is
    /// never reached.
    #[error(
        "step {step} (`{spec}`) lasts {duration_s:e} s, shorter than the {edge_s:e} s edge the \
         supply takes to reach its level: lengthen it or shorten the edge"
    )]
    ShorterThanEdge {
        /// The step, counted from 1.
        step: usize,
        /// The step in the compact form.
        spec: String,
        /// Its duration, seconds.
        duration_s: f64,
        /// The edge time, seconds.
        edge_s: f64,
    },
}

impl ProfileError {
    /// The step the error is about, counted from 1 (an event file's `event.N`).
    pub fn step(&self) -> usize {
        match self {
            ProfileError::Empty { step, .. } | ProfileError::ShorterThanEdge { step, .. } => *step,
        }
    }
}

impl Profile {
    /// Checks that every step is an event: a dip, interruption, swell or ramp lasts longer
    /// than 0 and at least one edge time (so its level is reached); a gap lasts longer than 0
    /// (except right after a ramp, where a zero gap brings the supply back to nominal at
    /// once); a variation's three times add up to more than 0. `frequency_hz` converts
    /// cycles.
    pub fn check(&self, frequency_hz: f64) -> Result<(), ProfileError> {
        for (k, step) in self.steps.iter().enumerate() {
            let spec = || {
                Profile {
                    steps: vec![step.clone()],
                    phase_deg: 0.0,
                    edge_s: self.edge_s,
                }
                .spec()
            };
            let (duration_s, needs_edge) = match step {
                Step::Dip { duration, .. } | Step::Swell { duration, .. } => {
                    (duration.seconds(frequency_hz), true)
                }
                Step::Ramp { duration, .. } | Step::Gap { duration } => {
                    (duration.seconds(frequency_hz), false)
                }
                Step::Variation {
                    decrease,
                    hold,
                    increase,
                    ..
                } => (
                    decrease.seconds(frequency_hz)
                        + hold.seconds(frequency_hz)
                        + increase.seconds(frequency_hz),
                    false,
                ),
            };
            let after_ramp = k > 0 && matches!(self.steps[k - 1], Step::Ramp { .. });
            if duration_s <= 0.0 && !(after_ramp && matches!(step, Step::Gap { .. })) {
                return Err(ProfileError::Empty {
                    step: k + 1,
                    spec: spec(),
                });
            }
            if needs_edge && duration_s < self.edge_s {
                return Err(ProfileError::ShorterThanEdge {
                    step: k + 1,
                    spec: spec(),
                    duration_s,
                    edge_s: self.edge_s,
                });
            }
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn compact_forms() {
        let p = parse_spec("interrupt:250cyc", DEFAULT_EDGE_S).unwrap();
        assert_eq!(
            p.steps,
            [Step::Dip {
                residual: 0.0,
                duration: Duration::Cycles(250.0)
            }]
        );
        let p = parse_spec("swell:120%:25cyc", DEFAULT_EDGE_S).unwrap();
        assert_eq!(
            p.steps,
            [Step::Swell {
                level: 1.2,
                duration: Duration::Cycles(25.0)
            }]
        );
        let p = parse_spec("vary:70%:0cyc/1cyc/25cyc", DEFAULT_EDGE_S).unwrap();
        assert!(
            matches!(p.steps[0], Step::Variation { residual, .. } if (residual - 0.7).abs() < 1e-12)
        );
        let p = parse_spec("ramp:100%-65%:20s", DEFAULT_EDGE_S).unwrap();
        assert_eq!(
            p.steps,
            [Step::Ramp {
                from: 1.0,
                to: 0.65,
                duration: Duration::Seconds(20.0)
            }]
        );
        let p = parse_spec("interrupt:10cyc;gap:200ms;interrupt:10cyc", DEFAULT_EDGE_S).unwrap();
        assert_eq!(p.steps.len(), 3);
        assert_eq!(p.spec(), "interrupt:10cyc;gap:200ms;interrupt:10cyc");
    }

    #[test]
    fn errors_point_at_the_fault() {
        let e = parse_spec("dip:40%:10cycles", DEFAULT_EDGE_S).unwrap_err();
        assert_eq!(e.at, 8);
        assert!(e.to_string().contains("        ^^^^^^^^"), "{e}");
        let e = parse_spec("dip:40:10cyc", DEFAULT_EDGE_S).unwrap_err();
        assert_eq!(e.at, 4);
        let e = parse_spec("sag:40%:10cyc", DEFAULT_EDGE_S).unwrap_err();
        assert!(e.message.contains("unknown event kind `sag`"));
        let e = parse_spec("dip:40%:10cyc;dip:40%:1cyc@90", DEFAULT_EDGE_S).unwrap_err();
        assert!(e.message.contains("first event only"));
        let e = parse_spec("swell:90%:1cyc", DEFAULT_EDGE_S).unwrap_err();
        assert!(e.message.contains("above 100%"));
    }

    #[test]
    fn steps_that_make_no_event_are_refused() {
        // Zero durations in any unit, and a dip shorter than its 5 us edge.
        for spec in [
            "dip:40%:0cyc",
            "swell:120%:0s",
            "interrupt:10cyc;gap:0s;dip:40%:5cyc",
            "vary:70%:0cyc/0cyc/0cyc",
            "ramp:100%-65%:0s",
        ] {
            let p = parse_spec(spec, DEFAULT_EDGE_S).unwrap();
            assert!(
                matches!(p.check(50.0), Err(ProfileError::Empty { .. })),
                "{spec}"
            );
        }
        let p = parse_spec("dip:40%:1e-9s", DEFAULT_EDGE_S).unwrap();
        assert!(matches!(
            p.check(50.0),
            Err(ProfileError::ShorterThanEdge { step: 1, .. })
        ));
        let p = parse_spec("dip:40%:1ms", 5e-3).unwrap();
        assert!(p.check(50.0).is_err());
        // After a ramp, a zero gap returns the supply to nominal at once.
        let p = parse_spec("ramp:100%-65%:2s;gap:0s", DEFAULT_EDGE_S).unwrap();
        assert_eq!(p.check(50.0), Ok(()));
        // The shortest IEC 61000-4-11 dip, half a cycle, is an event.
        let p = parse_spec(
            "dip:0%:0.5cyc;gap:1cyc;vary:70%:0cyc/1cyc/25cyc",
            DEFAULT_EDGE_S,
        )
        .unwrap();
        assert_eq!(p.check(50.0), Ok(()));
    }

    #[test]
    fn envelope_of_a_dip() {
        let p = parse_spec("dip:40%:10cyc", 5e-6).unwrap();
        let e = p.envelope(50.0);
        assert_eq!(e.level(0.0), 1.0);
        assert!((e.level(2.5e-6) - 0.7).abs() < 1e-12);
        assert_eq!(e.level(0.1), 0.4);
        // Duration counts from the start of the fall: 200 ms, then a 5 us rise.
        assert!((e.level(0.2 + 2.5e-6) - 0.7).abs() < 1e-9);
        assert_eq!(e.level(0.3), 1.0);
        assert!((e.end_s - 0.200_005).abs() < 1e-12);
    }
}
