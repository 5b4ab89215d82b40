//! The command modules of the `sagtrip` binary: each translates its options into library
//! calls and prints; the helpers they share.

use std::path::{Path, PathBuf};
use std::time::Instant;

use std::fmt::Write as _;

use clap::{Args, ValueEnum};

use sagtrip::builtin;
use sagtrip::circuit::{Circuit, PartSpec};
use sagtrip::circuit_file::parse_circuit;
use sagtrip::engine::{Settings, Simulator, Start};
use sagtrip::output::write_atomic;
use sagtrip::probe::{Probe, Trace};
use sagtrip::profile::{iec_presets, resolve, DEFAULT_EDGE_S};
use sagtrip::scenario::{find_mains, run_event, EventOptions, EventReport};
use sagtrip::summary::RunReport;
use sagtrip::units::{parse_value, significant, Engineering, Quantity};

/// Appends a line to a report string (writing to a String cannot fail).
macro_rules! say {
    ($out:expr) => {
        let _ = writeln!($out);
    };
    ($out:expr, $($arg:tt)*) => {
        let _ = writeln!($out, $($arg)*);
    };
}

/// Why a command failed, and so its exit code: 2 for a mistake in the input (a file, an
/// option), 1 for a run that could not give an answer (a simulation that failed, a
/// protector that never connected its load).
pub(crate) enum Failure {
    /// A mistake in the input: exit code 2.
    Input(String),
    /// A run or verification that failed: exit code 1.
    Run(String),
}

impl Failure {
    /// The process exit code.
    pub(crate) fn code(&self) -> u8 {
        match self {
            Failure::Input(_) => 2,
            Failure::Run(_) => 1,
        }
    }

    /// The message.
    pub(crate) fn message(&self) -> &str {
        match self {
            Failure::Input(m) | Failure::Run(m) => m,
        }
    }
}

/// A figure that could not be drawn: the run's answer could not be given in full.
impl From<sagtrip::plot::PlotError> for Failure {
    fn from(e: sagtrip::plot::PlotError) -> Self {
        Failure::Run(e.to_string())
    }
}

/// Any message built while reading the input is an input mistake.
impl From<String> for Failure {
    fn from(message: String) -> Self {
        Failure::Input(message)
    }
}

impl From<&str> for Failure {
    fn from(message: &str) -> Self {
        Failure::Input(message.to_string())
    }
}

/// What a command returns: its report, or why it failed.
pub(crate) type Outcome = Result<String, Failure>;

/// A failed power-up, event run or replay of the circuit `name`: a run failure, except
/// where the circuit lacks what the command needs (no mains source, no relay, an unknown
/// name), which is an input mistake. The option that raises a limit is named here.
pub(crate) fn scenario_failure(name: &str, e: sagtrip::scenario::ScenarioError) -> Failure {
    use sagtrip::scenario::ScenarioError as E;
    match &e {
        E::NotSettled { .. } => {
            Failure::Run(format!("{name}: {e} (raise it with --power-up-limit)"))
        }
        E::Simulation(_) => Failure::Run(format!("{name}: {e}")),
        E::NoMains(_) | E::Unknown(_) | E::NoRelay | E::Profile(_) | E::MainsFrequency { .. } => {
            Failure::Input(format!("{name}: {e}"))
        }
    }
}

/// Where a path leads: its canonical form, or for a file not yet there its folder's
/// canonical form joined with its name (links followed either way).
fn resolved(path: &Path) -> Option<PathBuf> {
    if let Ok(p) = std::fs::canonicalize(path) {
        return Some(p);
    }
    let name = path.file_name()?;
    let parent = match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p,
        _ => Path::new("."),
    };
    std::fs::canonicalize(parent).ok().map(|p| p.join(name))
}

/// Refuses to run when an output (option, path) leads to one of the inputs: writing it
/// would replace the input. Compares where the paths lead, links and `..` followed.
pub(crate) fn refuse_overwriting_inputs(
    outputs: &[(&str, Option<&Path>)],
    inputs: &[Option<&Path>],
) -> Result<(), Failure> {
    let inputs: Vec<(PathBuf, &Path)> = inputs
        .iter()
        .flatten()
        .filter_map(|p| resolved(p).map(|r| (r, *p)))
        .collect();
    for (option, path) in outputs {
        let Some(path) = path else { continue };
        let Some(target) = resolved(path) else {
            continue;
        };
        if let Some((_, input)) = inputs.iter().find(|(r, _)| *r == target) {
            return Err(Failure::Input(format!(
                "{option} {}: that is the input {}; writing it would replace it (choose another path)",
                path.display(),
                input.display()
            )));
        }
    }
    Ok(())
}

pub(crate) const SAFETY: &str = "\
SAFETY: mains voltage can kill. sagtrip simulates a circuit; it does not replace testing \
a real unit, local electrical codes, or the judgement of a licensed practitioner.

Exit codes: 0 success; 1 a run could not give an answer (a failed simulation, a protector \
that never connected its load); 2 a mistake in the input (a file, an option).";

/// How long power-up and restoration may take before a run gives up.
#[derive(Args)]
pub(crate) struct LimitArgs {
    /// Longest power-up before events, e.g. 30s or 120s: the load must be connected by then
    /// (default: 10 s, or five times the circuit's longest RC time constant if longer).
    #[arg(long, allow_hyphen_values = true)]
    power_up_limit: Option<String>,
    /// Longest run after an event's end waiting for the load to reconnect and the circuit
    /// to settle (default as for --power-up-limit).
    #[arg(long, allow_hyphen_values = true)]
    restore_limit: Option<String>,
    /// Simulate every cycle: turn off the shortcuts (the skipping of repeated cycles while
    /// a long event holds steady), to check any result against plain stepping.
    #[arg(long)]
    pub(crate) full_steps: bool,
}

impl LimitArgs {
    /// Event options with these limits and the given nominal supply.
    fn options(&self, nominal: Option<&str>) -> Result<EventOptions, String> {
        Ok(EventOptions {
            nominal: nominal
                .map(nominal_option)
                .transpose()?
                .map(|(rms_v, frequency_hz)| sagtrip::scenario::Nominal {
                    rms_v,
                    frequency_hz,
                }),
            settle_limit_s: time_option(self.power_up_limit.as_deref(), "power-up-limit")?,
            restore_limit_s: time_option(self.restore_limit.as_deref(), "restore-limit")?,
            skip_steady: !self.full_steps,
            ..EventOptions::default()
        })
    }
}

/// The circuit a command works on: its file (or the built-in reference guard) and the
/// what-if values changed in it.
#[derive(Args)]
pub(crate) struct CircuitArgs {
    /// Circuit file (TOML); the built-in reference guard when omitted.
    #[arg(long)]
    pub(crate) circuit: Option<PathBuf>,
    /// Change a part's value without editing the file, as PART.FIELD=VALUE (e.g.
    /// `c_delay.capacitance=22u`, `mains.sine.frequency=60Hz`); repeatable. Checked as if
    /// written in the file; reports name the circuit with its changes.
    #[arg(
        long = "set",
        value_name = "PART.FIELD=VALUE",
        allow_hyphen_values = true
    )]
    pub(crate) set: Vec<String>,
}

impl CircuitArgs {
    /// The circuit file, if one was given.
    pub(crate) fn path(&self) -> Option<&Path> {
        self.circuit.as_deref()
    }

    /// The circuit and the name to report it under.
    pub(crate) fn load(&self) -> Result<(Circuit, String), String> {
        self.load_with_text()
            .map(|(circuit, name, _)| (circuit, name))
    }

    /// As [`CircuitArgs::load`], also returning the text read (to build tolerance cases
    /// from).
    pub(crate) fn load_with_text(&self) -> Result<(Circuit, String, String), String> {
        load_circuit_and_text(self.path(), &self.set)
    }
}

/// The largest circuit, event or plan file read, bytes: a hand-written file is a few
/// kilobytes, and a generated one far under this.
pub(crate) const MAX_TEXT_FILE_BYTES: u64 = 10_000_000;

/// Reads a text input file (`what` names it in messages), refusing one over
/// [`MAX_TEXT_FILE_BYTES`] before reading it.
pub(crate) fn read_text(path: &Path, what: &str) -> Result<String, String> {
    let cannot = |e: std::io::Error| format!("cannot read {what} {}: {e}", path.display());
    let size = std::fs::metadata(path).map_err(cannot)?.len();
    if size > MAX_TEXT_FILE_BYTES {
        return Err(format!(
            "{what} {} holds {size} bytes: at most {MAX_TEXT_FILE_BYTES} (10 MB) are read",
            path.display()
        ));
    }
    std::fs::read_to_string(path).map_err(cannot)
}

/// Reads the circuit at `path`, or the built-in reference guard; returns it with the name
/// to report it under and the text read. Each `--set PART.FIELD=VALUE` is written into the text before it is read, so it is
/// checked exactly as if it were in the file; the circuit's name then lists them, so every
/// report does.
fn load_circuit_and_text(
    path: Option<&Path>,
    sets: &[String],
) -> Result<(Circuit, String, String), String> {
    let (text, mut name) = match path {
        Some(path) => (read_text(path, "circuit file")?, path.display().to_string()),
        None => (
            builtin::REFERENCE_GUARD.to_string(),
            builtin::REFERENCE_GUARD_NAME.to_string(),
        ),
    };
    let overrides = sets
        .iter()
        .map(|s| sagtrip::circuit_file::parse_override(s).map_err(|e| format!("--set {s}: {e}")))
        .collect::<Result<Vec<_>, _>>()?;
    let text = sagtrip::circuit_file::apply_overrides(&text, &overrides)
        .map_err(|e| format!("--set: {name}: {e}"))?;
    if !overrides.is_empty() {
        let list: Vec<String> = overrides.iter().map(ToString::to_string).collect();
        name = format!("{name} with --set {}", list.join(", "));
    }
    let circuit = parse_circuit(&text, &name).map_err(|e| e.to_string())?;
    Ok((circuit, name, text))
}

pub(crate) fn time_option(text: Option<&str>, name: &str) -> Result<Option<f64>, String> {
    text.map(|t| {
        parse_value(t, Quantity::Time)
            .map_err(|e| format!("--{name}: {e}"))
            .and_then(|v| {
                if (MIN_TIME_S..=MAX_TIME_S).contains(&v) {
                    Ok(v)
                } else {
                    Err(format!(
                        "--{name} {t}: allowed from {MIN_TIME_S:e} s (1 ns) to {MAX_TIME_S} s (one day)"
                    ))
                }
            })
    })
    .transpose()
}

/// The range of a time option, seconds: 1 ns to one day.
pub(crate) const MIN_TIME_S: f64 = 1e-9;
/// See [`MIN_TIME_S`].
pub(crate) const MAX_TIME_S: f64 = 86_400.0;
/// The range of a supply frequency, hertz.
pub(crate) const FREQUENCY_RANGE_HZ: (f64, f64) = sagtrip::scenario::MAINS_FREQUENCY_RANGE_HZ;
/// The most durations, or levels, of a sweep's grid.
pub(crate) const MAX_GRID_AXIS: usize = 1000;

/// Reads `--nominal 230V/50Hz`.
pub(crate) fn nominal_option(text: &str) -> Result<(f64, f64), String> {
    let (v, f) = text
        .split_once('/')
        .ok_or_else(|| format!("--nominal {text}: expected VOLTS/HERTZ, e.g. 230V/50Hz"))?;
    let v = parse_value(v, Quantity::Voltage).map_err(|e| format!("--nominal {text}: {e}"))?;
    let f = parse_value(f, Quantity::Frequency).map_err(|e| format!("--nominal {text}: {e}"))?;
    if !(v.is_finite() && v > 0.0 && v <= 1e6) {
        return Err(format!(
            "--nominal {text}: the voltage is allowed above 0 V up to 1 MV"
        ));
    }
    let (lo, hi) = FREQUENCY_RANGE_HZ;
    if !(lo..=hi).contains(&f) {
        return Err(format!(
            "--nominal {text}: the frequency is allowed from {lo} Hz to {hi} Hz"
        ));
    }
    Ok((v, f))
}

/// Reads a duration option such as `10cyc` or `200ms` in seconds at `frequency_hz`.
pub(crate) fn duration_option(text: &str, name: &str, frequency_hz: f64) -> Result<f64, String> {
    let text = text.trim();
    let seconds = if let Some(n) = text.strip_suffix("cyc") {
        n.trim()
            .parse::<f64>()
            .map_err(|_| format!("--{name} {text}: expected e.g. 10cyc or 200ms"))?
            / frequency_hz
    } else {
        parse_value(text, Quantity::Time).map_err(|e| format!("--{name}: {e}"))?
    };
    if seconds.is_finite() && (0.0..=MAX_TIME_S).contains(&seconds) {
        Ok(seconds)
    } else {
        Err(format!(
            "--{name} {text}: allowed from 0 s to {MAX_TIME_S} s (one day)"
        ))
    }
}

/// Reads FROM:TO:STEP (percent) into the list of levels.
pub(crate) fn level_range(text: &str, name: &str) -> Result<Vec<f64>, String> {
    let parts: Vec<f64> = text
        .split(':')
        .map(|p| p.trim().trim_end_matches('%').parse::<f64>())
        .collect::<Result<_, _>>()
        .map_err(|_| format!("--{name} {text}: expected FROM:TO:STEP in percent, e.g. 0:90:10"))?;
    let [from, to, step] = parts.as_slice() else {
        return Err(format!(
            "--{name} {text}: expected FROM:TO:STEP in percent, e.g. 0:90:10"
        ));
    };
    let (from, to, step) = (*from, *to, *step);
    let fits = [from, to, step].iter().all(|x| x.is_finite())
        && step > 0.0
        && from >= 0.0
        && from <= to
        && to <= 1000.0;
    if !fits {
        return Err(format!(
            "--{name} {text}: need 0 <= FROM <= TO <= 1000 and STEP > 0"
        ));
    }
    let count = ((to - from) / step + 1e-9).floor() + 1.0;
    if count > MAX_GRID_AXIS as f64 {
        return Err(format!(
            "--{name} {text}: {count} levels; at most {MAX_GRID_AXIS}"
        ));
    }
    let count = count as usize;
    Ok((0..count).map(|k| from + step * k as f64).collect())
}

/// Writes a plot as SVG or PNG by the file's extension, whole or not at all.
pub(crate) fn write_plot(
    path: &Path,
    png: impl FnOnce(&Path) -> Result<(), sagtrip::plot::PlotError>,
    svg: impl FnOnce() -> Result<String, sagtrip::plot::PlotError>,
) -> Result<(), String> {
    match path.extension().and_then(|e| e.to_str()) {
        Some("png") => {
            let temp = path.with_extension("png.partial.png");
            png(&temp)
                .map_err(|e| e.to_string())
                .and_then(|()| std::fs::rename(&temp, path).map_err(|e| e.to_string()))
                .map_err(|e| {
                    let _ = std::fs::remove_file(&temp);
                    format!("cannot write plot {}: {e}", path.display())
                })
        }
        Some("svg") => {
            let text = svg().map_err(|e| e.to_string())?;
            write_atomic(path, |w| w.write_all(text.as_bytes()))
                .map_err(|e| format!("cannot write plot {}: {e}", path.display()))
        }
        _ => check_plot_name(path),
    }
}

/// A comma-separated list of phase angles in degrees (`0,90deg,180`), for option `--NAME`.
pub(crate) fn phase_list(text: &str, name: &str) -> Result<Vec<f64>, Failure> {
    text.split(',')
        .map(sagtrip::units::parse_phase_deg)
        .collect::<Option<Vec<f64>>>()
        .ok_or_else(|| format!("--{name} {text}: expected degrees, e.g. 0,90deg,180,270").into())
}

/// A JSON value as indented text.
pub(crate) fn pretty_json(value: &serde_json::Value) -> String {
    serde_json::to_string_pretty(value).unwrap_or_default()
}

/// Refuses a plot file name that is neither `.svg` nor `.png` (before any work is done).
pub(crate) fn check_plot_name(path: &Path) -> Result<(), String> {
    match path.extension().and_then(|e| e.to_str()) {
        Some("svg" | "png") => Ok(()),
        _ => Err(format!(
            "--plot {}: the file name must end in .svg or .png",
            path.display()
        )),
    }
}

pub(crate) mod check;
pub(crate) mod detect;
pub(crate) mod merge;
pub(crate) mod new;
pub(crate) mod presets;
pub(crate) mod recording;
pub(crate) mod replay;
pub(crate) mod run;
pub(crate) mod sweep;
pub(crate) mod synth;
pub(crate) mod table;
pub(crate) mod thresholds;
