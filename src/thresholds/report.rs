//! The report of the static thresholds and slow ramps: its JSON object and its text.

use std::fmt::Write as _;

use super::{Side, SideThresholds, StaticThresholds, Threshold};

/// The report of a threshold search.
pub struct ThresholdsReport<'a> {
    /// The circuit's name (its file, or the built-in guard).
    pub name: &'a str,
    /// The circuit's title.
    pub title: &'a str,
    /// The thresholds and ramps found.
    pub result: &'a StaticThresholds,
    /// Time of each slow ramp, out and back, seconds.
    pub ramp_s: f64,
    /// Wall time, seconds.
    pub wall_s: f64,
}

/// A side's name in a report.
fn label(s: &SideThresholds) -> &'static str {
    match s.side {
        Side::Under => "under",
        Side::Over => "over",
    }
}

impl ThresholdsReport<'_> {
    /// The report as one JSON object.
    pub fn json(&self) -> serde_json::Value {
        let mut value = serde_json::to_value(self.result).unwrap_or_default();
        value["circuit"] = serde_json::json!(self.name);
        value["wall_time_s"] = serde_json::json!(self.wall_s);
        value
    }

    /// The report as text: the trip and reset voltages per side, then the slow ramps.
    pub fn text(&self) -> String {
        let mut out = String::new();
        let result = self.result;
        say!(out, "{}: {}", self.name, self.title);
        say!(
            out,
            "static thresholds on a {:.1} V {:.0} Hz supply: each level held {} s, bisection to {} V",
            result.nominal_rms_v,
            result.frequency_hz,
            result.hold_s,
            result.resolution_v
        );
        say!(
            out,
            "\n{:<6} {:>10} {:>8} {:>10} {:>8} {:>11} {:>6}",
            "side",
            "trip (V)",
            "trip %",
            "reset (V)",
            "reset %",
            "hysteresis",
            "tests"
        );
        for s in [&result.under, &result.over] {
            let v = |t: Option<Threshold>| {
                t.map_or(("-".to_string(), "-".to_string()), |t| {
                    (format!("{:.1}", t.volts), format!("{:.2}", t.percent))
                })
            };
            let (tv, tp) = v(s.trip);
            let (rv, rp) = v(s.reset);
            let tests = s.trip.map_or(0, |t| t.tests) + s.reset.map_or(0, |t| t.tests);
            say!(
                out,
                "{:<6} {:>10} {:>8} {:>10} {:>8} {:>11} {:>6}",
                label(s),
                tv,
                tp,
                rv,
                rp,
                s.hysteresis_v
                    .map_or("-".to_string(), |h| format!("{h:.1} V")),
                tests
            );
        }
        for s in [&result.under, &result.over] {
            if let Some(note) = &s.note {
                say!(out, "{}: {note}", label(s));
            }
        }
        self.ramp_lines(&mut out);
        say!(out, "\n{:.1} s wall", self.wall_s);
        out
    }

    /// The slow ramps' lines, if any ramp was run.
    fn ramp_lines(&self, out: &mut String) {
        let result = self.result;
        let ramps: Vec<_> = [&result.under, &result.over]
            .into_iter()
            .filter_map(|s| s.ramp.as_ref().map(|r| (label(s), r)))
            .collect();
        if ramps.is_empty() {
            return;
        }
        say!(
            out,
            "\nslow ramps: from nominal over {} s to 5% beyond the trip, held {} s, back over {} s",
            self.ramp_s,
            result.hold_s,
            self.ramp_s
        );
        say!(
            out,
            "{:<6} {:>9} {:>12} {:>12} {:>12}  {}",
            "side",
            "rate V/s",
            "opened at",
            "closed at",
            "armature",
            "chatter"
        );
        for (side, r) in ramps {
            let volts = |v: Option<f64>| v.map_or("-".to_string(), |v| format!("{v:.1} V"));
            let toggles: Vec<String> = r
                .comparator_toggles
                .iter()
                .map(|(n, k)| format!("{n} {k}"))
                .collect();
            let verdict = if r.relay_chatters {
                "load path chatters"
            } else if r.most_toggles() > 2 {
                "none, but a comparator toggled (a slower ramp may make the load path chatter)"
            } else {
                "none"
            };
            say!(
                out,
                "{:<6} {:>9.2} {:>12} {:>12} {:>12}  {verdict} (comparator toggles: {})",
                side,
                r.rate_v_per_s,
                volts(r.trip_v),
                volts(r.reconnect_v),
                format!("{} moves", r.relay_transitions),
                toggles.join(", ")
            );
        }
        say!(
            out,
            "(the load opens and closes after the protector's own delays, so on a ramp it does \
             so beyond the static voltages by the ramp rate times the delay)"
        );
    }
}
