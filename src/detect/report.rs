//! The report of a detection: its JSON object, its text and its events as CSV.

use std::fmt::Write as _;
use std::io::{self, Write};

use super::Detection;

/// The report of the events detected in a recording.
pub struct DetectionReport<'a> {
    /// The recording's file.
    pub recording: &'a str,
    /// The recording's format in words.
    pub format: &'a str,
    /// How its samples were scaled to volts, in words.
    pub scale: &'a str,
    /// The declared supply voltage, volts RMS.
    pub declared_v: f64,
    /// The declared supply frequency, hertz.
    pub frequency_hz: f64,
    /// Where the declared supply came from, in words.
    pub declared_from: &'a str,
    /// The detection.
    pub detection: &'a Detection,
    /// Where the events were written as CSV, if they were.
    pub events_file: Option<&'a str>,
}

impl DetectionReport<'_> {
    /// The measured frequency over the 10 s intervals: (mean, min, max), hertz; `None`
    /// when no interval of undisturbed cycles was measured.
    fn frequency_spread(&self) -> Option<(f64, f64, f64)> {
        let frequencies = self.detection.frequency_intervals();
        if frequencies.is_empty() {
            return None;
        }
        let (min, max) = frequencies
            .iter()
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &f| {
                (a.min(f), b.max(f))
            });
        let mean = frequencies.iter().sum::<f64>() / frequencies.len() as f64;
        Some((mean, min, max))
    }

    /// The report as one JSON object.
    pub fn json(&self) -> serde_json::Value {
        let d = self.detection;
        serde_json::json!({
            "recording": self.recording,
            "format": self.format,
            "scale": self.scale,
            "declared_rms_v": self.declared_v,
            "frequency_hz": self.frequency_hz,
            "declared_from": self.declared_from,
            "duration_s": d.duration_s,
            "samples": d.samples,
            "measured_frequency_hz": self.frequency_spread().map(|(mean, min, max)| {
                serde_json::json!({ "mean": mean, "min": min, "max": max })
            }),
            "events": d.events,
        })
    }

    /// The report as text: the recording, the declared supply, one line per event.
    pub fn text(&self) -> String {
        let mut out = String::new();
        let d = self.detection;
        say!(
            out,
            "{}: {}, {:.3} s",
            self.recording,
            self.format,
            d.duration_s
        );
        say!(out, "scale: {}", self.scale);
        let measured = match self.frequency_spread() {
            None => "measured frequency: no 10 s interval of undisturbed cycles".to_string(),
            Some((fmean, fmin, fmax)) => format!(
                "measured frequency {fmean:.3} Hz (10 s intervals from {fmin:.3} to {fmax:.3} Hz, \
                 cycles near events left out)"
            ),
        };
        say!(
            out,
            "declared {} V / {} Hz ({}); {measured}",
            self.declared_v,
            self.frequency_hz,
            self.declared_from
        );
        if d.events.is_empty() {
            say!(out, "\nno dips, swells or interruptions");
        } else {
            say!(
                out,
                "\n{:<13} {:>11} {:>11} {:>9}  {:<36} {:<8} {}",
                "event",
                "start (s)",
                "duration",
                "level",
                "IEEE 1159",
                "EN 50160",
                "phase jump"
            );
            for e in &d.events {
                say!(
                    out,
                    "{:<13} {:>11.4} {:>9.1}ms {:>8.2}%  {:<36} {:<8} {}{}",
                    e.kind.name(),
                    e.start_s,
                    e.duration_s * 1e3,
                    e.level_pct,
                    e.ieee_1159,
                    e.en_50160,
                    e.phase_jump_deg
                        .map_or("-".to_string(), |j| format!("{j:+.1} deg")),
                    if e.open_at_end {
                        " (still open at the end)"
                    } else {
                        ""
                    }
                );
            }
        }
        if let Some(file) = self.events_file {
            say!(out, "\nevents written to {file}");
        }
        out
    }
}

/// Writes the detected events as CSV, one row per event.
pub fn write_events_csv(detection: &Detection, w: &mut dyn Write) -> io::Result<()> {
    writeln!(
        w,
        "kind,start_s,duration_s,level_pct,ieee_1159,en_50160,phase_jump_deg,open_at_end"
    )?;
    for e in &detection.events {
        writeln!(
            w,
            "{},{},{},{},{},{},{},{}",
            e.kind.name(),
            e.start_s,
            e.duration_s,
            e.level_pct,
            e.ieee_1159.replace(',', ";"),
            e.en_50160.replace(',', ";"),
            e.phase_jump_deg.map_or(String::new(), |j| j.to_string()),
            e.open_at_end
        )?;
    }
    Ok(())
}
