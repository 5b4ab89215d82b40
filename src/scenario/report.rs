//! The reports of scenario runs: one event's measured response (`EventReport`) and a
//! replayed recording's events, trips and reconnections (`ReplayReport`).

use std::fmt::Write as _;

use super::{EventRun, Replay};

/// The report of one event run: its JSON object and its text.
pub struct EventReport<'a> {
    /// The circuit's name (its file, or the built-in guard).
    pub name: &'a str,
    /// The circuit's title.
    pub title: &'a str,
    /// The run.
    pub run: &'a EventRun,
    /// The event's start phase, degrees.
    pub phase_deg: f64,
    /// Wall time, seconds.
    pub wall_s: f64,
    /// Where the trace was written, if it was.
    pub trace_file: Option<&'a str>,
    /// Where the plot was written, if it was.
    pub plot_file: Option<&'a str>,
}

impl EventReport<'_> {
    /// The report as one JSON object: the measurements, then the run's context.
    pub fn json(&self) -> serde_json::Value {
        let r = self.run;
        let mut value = serde_json::to_value(&r.measurements).unwrap_or_default();
        if let serde_json::Value::Object(map) = &mut value {
            let extra = serde_json::json!({
                "circuit": self.name,
                "event": r.event,
                "nominal_rms_v": r.nominal_rms_v,
                "frequency_hz": r.frequency_hz,
                "phase_deg": self.phase_deg,
                "onset_s": r.onset_s,
                "event_end_s": r.event_end_s,
                "run_end_s": r.run_end_s,
                "settled_at_s": r.settled_at_s,
                "power_up_limit_s": r.settle_limit_s,
                "restore_limit_s": r.restore_limit_s,
                "settled_after": r.settled_after,
                "min_rail_v": r.min_rail_v,
                "rail": r.rail,
                "comparator_toggles": r.comparator_toggles,
                "stats": r.stats,
                "wall_time_s": self.wall_s,
                "trace": self.trace_file,
                "plot": self.plot_file,
            });
            if let serde_json::Value::Object(extra) = extra {
                map.extend(extra);
            }
        }
        value
    }

    /// The report as text: the event, then one line per measurement.
    pub fn text(&self) -> String {
        let mut out = String::new();
        let result = self.run;
        let m = &result.measurements;
        let ms = |v: Option<f64>| v.map_or("-".to_string(), |v| format!("{v:.2} ms"));
        say!(out, "{}: {}", self.name, self.title);
        say!(
            out,
            "event {} on {:.1} V / {} Hz, onset at {:.4} s (load connected and settled at {:.3} s), event end at {:.4} s",
            result.event,
            result.nominal_rms_v,
            result.frequency_hz,
            result.onset_s,
            result.settled_at_s,
            result.event_end_s
        );
        say!(out);
        say!(
            out,
            "  tripped                 {}",
            if m.tripped {
                "yes"
            } else {
                "no (rode through)"
            }
        );
        say!(out, "  trip latency            {}", ms(m.trip_latency_ms));
        let restore = if m.tripped && !m.load_connected_at_end {
            format!("not reconnected within {} s", result.restore_limit_s)
        } else if m.tripped && m.restore_latency_ms.is_none() {
            "- (reconnected for good before the event ended)".to_string()
        } else {
            ms(m.restore_latency_ms)
        };
        say!(out, "  restore latency         {restore}");
        if m.reconnections.len() > 1 || (m.tripped && m.restore_latency_ms.is_none()) {
            for r in &m.reconnections {
                let after = match (r.after_disturbance, r.latency_ms) {
                    (Some(k), Some(l)) => format!("{l:.2} ms after disturbance {k} ended"),
                    _ => "before the first disturbance ended".to_string(),
                };
                let during = if r.during_disturbance {
                    ", during a disturbance"
                } else {
                    ""
                };
                say!(
                    out,
                    "  reconnected             {:.2} ms after onset ({after}{during})",
                    r.since_onset_ms
                );
            }
        }
        say!(out, "  relay release time      {}", ms(m.release_time_ms));
        say!(out, "  relay operate time      {}", ms(m.operate_time_ms));
        say!(out, "  contact bounce          {}", ms(m.bounce_ms));
        say!(out, "  armature transitions    {}", m.relay_transitions);
        say!(
            out,
            "  load path               opened {}, closed {} (bounce excluded)",
            m.load_path_openings,
            m.load_path_closings
        );
        say!(
            out,
            "  chatter                 {}",
            if m.chatter {
                "YES (the load path opened or closed more than once per disturbance)"
            } else {
                "no"
            }
        );
        say!(
            out,
            "  load interruption       {:.2} ms",
            m.load_interruption_ms
        );
        if let (Some(v), Some(rail)) = (result.min_rail_v, &result.rail) {
            say!(out, "  minimum rail ({rail})      {v:.3} V");
        }
        for (comparator, n) in &result.comparator_toggles {
            say!(out, "  {comparator:<22}  {n} output toggles");
        }
        let s = &result.stats;
        let skipped = if s.cycles_jumped > 0 || s.skipped_s > 0.0 {
            format!(
                " ({:.3} s skipped: {} envelope steps over {} cycles, {} cycles simulated to take them)",
                s.skipped_s, s.envelope_steps, s.cycles_jumped, s.envelope_cycles
            )
        } else {
            String::new()
        };
        say!(
            out,
            "\nrun ended at {:.3} s ({}); {} steps{skipped}, {:.3} s wall",
            result.run_end_s,
            if result.settled_after {
                "restored and settled"
            } else {
                "limit reached before the protector restored and settled"
            },
            s.accepted_steps,
            self.wall_s
        );
        if let Some(file) = self.trace_file {
            say!(
                out,
                "trace: {} rows written to {file}",
                result.trace.time.len()
            );
        }
        if let Some(file) = self.plot_file {
            say!(out, "plot: {file}");
        }
        out
    }
}

/// The report of a replayed recording: its JSON object and its text.
pub struct ReplayReport<'a> {
    /// The circuit's name (its file, or the built-in guard).
    pub name: &'a str,
    /// The circuit's title.
    pub title: &'a str,
    /// The recording's file.
    pub recording: &'a str,
    /// The recording's format in words.
    pub format: &'a str,
    /// How its samples were scaled to volts, in words.
    pub scale: &'a str,
    /// The replay.
    pub replay: &'a Replay,
    /// Wall time, seconds.
    pub wall_s: f64,
}

impl ReplayReport<'_> {
    /// How many detected events tripped the protector.
    fn tripped(&self) -> usize {
        self.replay.responses.iter().filter(|r| r.tripped).count()
    }

    /// The report as one JSON object.
    pub fn json(&self) -> serde_json::Value {
        let replay = self.replay;
        let tripped = self.tripped();
        serde_json::json!({
            "circuit": self.name,
            "recording": self.recording,
            "format": self.format,
            "scale": self.scale,
            "joined_at_s": replay.joined_at_s,
            "duration_s": replay.duration_s,
            "events": replay.responses,
            "nuisance_trips": replay.nuisance_trips,
            "trips": replay.trips,
            "summary": {
                "events": replay.responses.len(),
                "events_tripped": tripped,
                "events_ridden_through": replay.responses.len() - tripped,
                "nuisance_trips": replay.nuisance_trips.len(),
            },
            "min_rail_v": replay.min_rail_v,
            "stats": replay.stats,
            "wall_time_s": self.wall_s,
        })
    }

    /// The report as text: one line per detected event with the protector's response, the
    /// trips no event explains, and a summary.
    pub fn text(&self) -> String {
        let mut out = String::new();
        let replay = self.replay;
        say!(out, "{}: {}", self.name, self.title);
        say!(
            out,
            "{}: {}, {:.3} s; scale {}; joined at {:.4} s",
            self.recording,
            self.format,
            replay.duration_s,
            self.scale,
            replay.joined_at_s
        );
        if replay.responses.is_empty() {
            say!(out, "\nno dips, swells or interruptions detected");
        } else {
            self.event_lines(&mut out);
        }
        for t in &replay.nuisance_trips {
            say!(
                out,
                "NUISANCE TRIP at {:.4} s with no detected event",
                t.time_s
            );
        }
        let tripped = self.tripped();
        say!(
            out,
            "\n{} events: {} tripped, {} ridden through; {} nuisance trip{}; lowest rail {}",
            replay.responses.len(),
            tripped,
            replay.responses.len() - tripped,
            replay.nuisance_trips.len(),
            if replay.nuisance_trips.len() == 1 {
                ""
            } else {
                "s"
            },
            replay
                .min_rail_v
                .map_or("-".into(), |v| format!("{v:.3} V"))
        );
        say!(
            out,
            "{:.2} s wall, {:.0}x real time",
            self.wall_s,
            replay.duration_s / self.wall_s.max(1e-9)
        );
        out
    }

    /// The table of detected events and the protector's response to each.
    fn event_lines(&self, out: &mut String) {
        say!(
            out,
            "\n{:<13} {:>10} {:>10} {:>10} {:>8}  {:<8} {:>12} {:>12}",
            "event",
            "start (s)",
            "onset (s)",
            "duration",
            "level",
            "tripped",
            "trip after",
            "reconnected"
        );
        for r in &self.replay.responses {
            let e = &r.event;
            say!(
                out,
                "{:<13} {:>10.4} {:>10} {:>8.1}ms {:>7.2}%  {:<8} {:>12} {:>12}",
                e.kind.name(),
                e.start_s,
                e.wave_start_s.map_or("-".into(), |t| format!("{t:.4}")),
                e.duration_s * 1e3,
                e.level_pct,
                match (r.tripped, r.chatter) {
                    (_, true) => "chatters",
                    (true, false) => "yes",
                    (false, false) => "no",
                },
                r.trip_latency_ms
                    .map_or("-".into(), |v| format!("{v:.1} ms")),
                match (r.tripped, r.restore_latency_ms) {
                    (_, Some(v)) => format!("{v:.1} ms"),
                    (true, None) if r.reconnected_during_event => "during it".into(),
                    (true, None) => "not by the end".into(),
                    (false, None) => "-".into(),
                },
            );
        }
        say!(
            out,
            "(start: IEC 61000-4-30 Urms(1/2); onset: where the waveform departs from the cycle \
             before. Trip and reconnection times count from the onset and the point-on-wave end, \
             or from the Urms(1/2) start and end where the onset shows \"-\".)"
        );
    }
}
