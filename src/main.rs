//! The `sagtrip` command line: parses arguments, reads and writes files, prints.
//! Every computation lives in the library.

use std::path::{Path, PathBuf};
use std::process::ExitCode;
use std::time::Instant;

use std::fmt::Write as _;
use std::io::Write as _;

use clap::{Args, Parser, Subcommand, ValueEnum};

use sagtrip::builtin;
use sagtrip::circuit::{Circuit, PartSpec};
use sagtrip::circuit_file::parse_circuit;
use sagtrip::engine::{Settings, Simulator, Start};
use sagtrip::output::write_atomic;
use sagtrip::probe::{Probe, Trace};
use sagtrip::profile::{iec_presets, resolve, DEFAULT_EDGE_S};
use sagtrip::scenario::{find_mains, run_event, EventOptions};
use sagtrip::summary::{relay_timelines, settled_values};
use sagtrip::units::{parse_value, Engineering, Quantity};

/// Appends a line to a report string (writing to a String cannot fail).
macro_rules! say {
    ($out:expr) => {
        let _ = writeln!($out);
    };
    ($out:expr, $($arg:tt)*) => {
        let _ = writeln!($out, $($arg)*);
    };
}

const SAFETY: &str = "\
SAFETY: mains voltage can kill. sagtrip simulates a circuit; it does not replace testing \
a real unit, local electrical codes, or the judgement of a licensed practitioner.";

/// Simulate mains over/under-voltage protectors in the time domain.
#[derive(Parser)]
#[command(name = "sagtrip", version, about, after_help = SAFETY)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    /// Validate a circuit file and list its parts, nodes and parameter sets.
    Check {
        /// Circuit file (TOML); the built-in reference guard when omitted.
        #[arg(long)]
        circuit: Option<PathBuf>,
    },
    /// Simulate a circuit: a power-up, or with --event a supply disturbance and the
    /// protector's measured response.
    Run(Box<RunArgs>),
    /// List the built-in IEC 61000-4-11 test profiles usable with --event.
    Profiles,
    /// Write a supply event as a WAV recording (to drive a bench amplifier or a waveform
    /// source, or to replay).
    Synth(SynthArgs),
    /// Sweep dip depth (and swell level) against duration: the trip map and the refined
    /// ride-through/trip boundary.
    Sweep(SweepArgs),
    /// Join the folders of a sharded sweep into one result and map.
    Merge(MergeArgs),
    /// Find dips, swells and interruptions in a recorded waveform (IEC 61000-4-30 method).
    Detect(DetectArgs),
    /// Drive the protector with a recorded waveform and report how it answered each event.
    Replay(ReplayArgs),
    /// Find the static over- and under-voltage trip and reset voltages by bisection, and
    /// ramp slowly through each to show chatter.
    Thresholds(ThresholdsArgs),
    /// The datasheet timing table: the IEC 61000-4-11 preferred tests of a class, swells
    /// and the static thresholds, at four start phases, as Markdown, CSV or JSON.
    Table(TableArgs),
}

#[derive(Args)]
struct TableArgs {
    /// Circuit file (TOML); the built-in reference guard when omitted.
    #[arg(long)]
    circuit: Option<PathBuf>,
    /// Nominal supply, e.g. 230V/50Hz (default: the circuit's mains source).
    #[arg(long)]
    nominal: Option<String>,
    /// IEC 61000-4-11 test class of the default plan (2 or 3).
    #[arg(long, default_value_t = 3)]
    class: u8,
    /// A test plan file (TOML) instead of the default plan; see docs/table.md.
    #[arg(long)]
    plan: Option<PathBuf>,
    /// Start phase angles in degrees, e.g. 0,90,180,270 (default: the plan's).
    #[arg(long)]
    phases: Option<String>,
    /// Leave the static thresholds out.
    #[arg(long)]
    no_thresholds: bool,
    /// Also write the table as CSV to this file.
    #[arg(long)]
    csv: Option<PathBuf>,
    /// Also write the Markdown table to this file.
    #[arg(long)]
    markdown: Option<PathBuf>,
    /// Also write a self-contained HTML report (the table, a trip map of dips 0..90% and
    /// swells 110..150% from half a cycle to 10 s at 0 and 90 degrees, the threshold plot).
    #[arg(long)]
    html: Option<PathBuf>,
    /// Print the table as JSON instead of Markdown.
    #[arg(long)]
    json: bool,
    /// Also run every corner of the circuit's toleranced values; with more than 8 values,
    /// the 8 with the largest effect found by screening (see --screen).
    #[arg(long)]
    corners: bool,
    /// With --corners: screen the values first (each alone at its limits) and vary only the
    /// K with the largest effect in the corners, the others as written (K from 1 to 8).
    #[arg(long, value_name = "K")]
    screen: Option<usize>,
    /// Also run this many Monte Carlo samples of the toleranced values.
    #[arg(long, value_name = "N")]
    monte_carlo: Option<usize>,
    /// Seed of the Monte Carlo samples (the same seed gives the same table).
    #[arg(long, default_value_t = 1)]
    seed: u64,
    /// No progress bar.
    #[arg(long)]
    quiet: bool,
    #[command(flatten)]
    limits: LimitArgs,
}

#[derive(Args)]
struct ThresholdsArgs {
    /// Circuit file (TOML); the built-in reference guard when omitted.
    #[arg(long)]
    circuit: Option<PathBuf>,
    /// Nominal supply, e.g. 230V/50Hz (default: the circuit's mains source).
    #[arg(long)]
    nominal: Option<String>,
    /// Bisection resolution, volts RMS.
    #[arg(long, default_value = "0.1V")]
    resolution: String,
    /// How long each test level is held: longer than the protector's trip and reconnection
    /// delays (e.g. 2s, 100cyc).
    #[arg(long, default_value = "2s")]
    hold: String,
    /// Time of each slow ramp, out through the threshold and back.
    #[arg(long, default_value = "10s")]
    ramp: String,
    /// Draw the trip and reset voltages on a voltage axis into FILE.svg or FILE.png.
    #[arg(long)]
    plot: Option<PathBuf>,
    /// Print the result as JSON.
    #[arg(long)]
    json: bool,
    #[command(flatten)]
    limits: LimitArgs,
}

/// Where a recording comes from and how to scale it.
#[derive(Args)]
struct RecordingInput {
    /// The recording: a .wav file, or a .csv file with a time and a voltage column.
    recording: PathBuf,
    /// WAV channel to read, counting from 0.
    #[arg(long, default_value_t = 0)]
    channel: usize,
    /// Volts of a full-scale WAV sample (for CSV: a factor on the voltage column).
    #[arg(long, conflicts_with = "calibrate")]
    volts_per_full_scale: Option<String>,
    /// Scale so that the RMS of the first whole cycles equals this, e.g. 230V.
    #[arg(long)]
    calibrate: Option<String>,
    /// Header of the CSV time column (seconds).
    #[arg(long, default_value = "time_s")]
    time_column: String,
    /// Header of the CSV voltage column.
    #[arg(long, default_value = "voltage_V")]
    voltage_column: String,
    /// Dip threshold, % of the declared voltage.
    #[arg(long, default_value_t = 90.0)]
    dip: f64,
    /// Swell threshold, % of the declared voltage.
    #[arg(long, default_value_t = 110.0)]
    swell: f64,
    /// Interruption threshold, % of the declared voltage.
    #[arg(long, default_value_t = 10.0)]
    interruption: f64,
    /// Hysteresis, % of the declared voltage.
    #[arg(long, default_value_t = 2.0)]
    hysteresis: f64,
    /// Smallest phase jump flagged, degrees.
    #[arg(long, default_value_t = 10.0)]
    phase_jump: f64,
}

#[derive(Args)]
struct DetectArgs {
    #[command(flatten)]
    input: RecordingInput,
    /// Declared supply, e.g. 230V/50Hz (default: the --calibrate voltage, or the standard
    /// voltage nearest the first cycles, at the measured frequency's 50 or 60 Hz). A
    /// recording whose frequency differs from it by more than 5% is refused.
    #[arg(long)]
    nominal: Option<String>,
    /// Write the events to this CSV file.
    #[arg(long)]
    out: Option<PathBuf>,
    /// Draw Urms(1/2) with the events, and the events on the ITI curve, into FILE.svg or
    /// FILE.png.
    #[arg(long)]
    plot: Option<PathBuf>,
    /// Print the result as JSON.
    #[arg(long)]
    json: bool,
}

#[derive(Args)]
struct ReplayArgs {
    #[command(flatten)]
    input: RecordingInput,
    /// Circuit file (TOML); the built-in reference guard when omitted.
    #[arg(long)]
    circuit: Option<PathBuf>,
    /// Declared supply, e.g. 230V/50Hz (default: the circuit's mains source).
    #[arg(long)]
    nominal: Option<String>,
    /// Write the replayed waveforms (mains, rail, comparator outputs) to this CSV file.
    #[arg(long)]
    trace: Option<PathBuf>,
    /// Draw Urms(1/2) with the events and the trips, and the events on the ITI curve, into
    /// FILE.svg or FILE.png.
    #[arg(long)]
    plot: Option<PathBuf>,
    /// Print the result as JSON.
    #[arg(long)]
    json: bool,
    #[command(flatten)]
    limits: LimitArgs,
}

#[derive(Args)]
struct SweepArgs {
    /// Circuit file (TOML); the built-in reference guard when omitted.
    #[arg(long)]
    circuit: Option<PathBuf>,
    /// Dip residual levels in % of nominal, FROM:TO:STEP.
    #[arg(long, default_value = "0:90:10")]
    levels: String,
    /// Swell levels in % of nominal, FROM:TO:STEP (none unless given).
    #[arg(long)]
    swells: Option<String>,
    /// Shortest and longest duration, e.g. 0.5cyc:10s.
    #[arg(long, default_value = "0.5cyc:10s")]
    durations: String,
    /// Number of durations, spaced evenly on a log scale.
    #[arg(long, default_value_t = 12)]
    duration_count: usize,
    /// Start phase angles in degrees, comma-separated; each cell reports the worst case.
    #[arg(long, default_value = "0,90")]
    phases: String,
    /// Boundary resolution, % of nominal.
    #[arg(long, default_value_t = 0.5)]
    resolution: f64,
    /// Skip the boundary refinement.
    #[arg(long)]
    no_refine: bool,
    /// Journal the sweep into this folder as it runs (points.csv, boundary.csv) and write
    /// sweep.json at the end.
    #[arg(long)]
    out: Option<PathBuf>,
    /// Draw the trip map with the reference curves into FILE.svg or FILE.png.
    #[arg(long)]
    plot: Option<PathBuf>,
    /// No progress bar.
    #[arg(long)]
    quiet: bool,
    /// Print the results as JSON.
    #[arg(long)]
    json: bool,
    /// Nominal supply, e.g. 230V/50Hz (default: the mains source's own).
    #[arg(long)]
    nominal: Option<String>,
    /// Run only the K-th of N deterministic shares of the grid (for array jobs); join the
    /// shards' folders with `sagtrip merge`.
    #[arg(long)]
    shard: Option<String>,
    /// Continue the sweep journaled in --out, skipping the points it already holds.
    #[arg(long)]
    resume: bool,
    #[command(flatten)]
    limits: LimitArgs,
}

#[derive(Args)]
struct MergeArgs {
    /// The folders of the shards (each written by `sweep --shard K/N --out FOLDER`).
    #[arg(required = true)]
    folders: Vec<PathBuf>,
    /// Folder for the merged points.csv, boundary.csv and sweep.json.
    #[arg(long)]
    out: PathBuf,
    /// Draw the merged trip map into FILE.svg or FILE.png.
    #[arg(long)]
    plot: Option<PathBuf>,
}

#[derive(Args)]
struct SynthArgs {
    /// The event, as for `run --event` (compact spec or preset name).
    spec: String,
    /// The WAV file to write.
    #[arg(long)]
    out: PathBuf,
    /// Nominal supply (default 230V/50Hz).
    #[arg(long, default_value = "230V/50Hz")]
    nominal: String,
    /// Samples per second.
    #[arg(long, default_value_t = 10_000)]
    rate: u32,
    /// Sample encoding.
    #[arg(long, value_enum, default_value_t = FormatArg::Int16)]
    format: FormatArg,
    /// Volts represented by a full-scale sample (default: twice the nominal peak).
    #[arg(long)]
    volts_per_full_scale: Option<String>,
    /// Nominal supply before the event (default 10cyc).
    #[arg(long, default_value = "10cyc")]
    lead: String,
    /// Nominal supply after the event (default 50cyc).
    #[arg(long, default_value = "50cyc")]
    tail: String,
    /// Rise and fall time of abrupt changes (default 5us).
    #[arg(long)]
    edge: Option<String>,
    /// Harmonics to add, ORDER:PERCENT of the fundamental, comma-separated (e.g. 3:5,5:3).
    #[arg(long)]
    harmonics: Option<String>,
    /// Uniform noise to add, percent of the nominal peak (reproducible: fixed seed).
    #[arg(long, default_value_t = 0.0)]
    noise: f64,
}

#[derive(Clone, Copy, ValueEnum)]
enum FormatArg {
    /// 16-bit integer samples.
    Int16,
    /// 24-bit integer samples.
    Int24,
    /// 32-bit float samples.
    Float32,
}

#[derive(Args)]
struct RunArgs {
    /// Circuit file (TOML); the built-in reference guard when omitted.
    #[arg(long)]
    circuit: Option<PathBuf>,
    /// Simulated time, e.g. 200ms, 1s (default: 2 s for a circuit with a relay, else 10
    /// mains cycles, or 100 ms without a sine source).
    #[arg(long)]
    duration: Option<String>,
    /// Largest time step, e.g. 50us (default 500us; the truncation-error control takes
    /// shorter steps wherever the waveforms need them).
    #[arg(long)]
    max_step: Option<String>,
    /// How the run begins (default: from rest, as when the unit is plugged in).
    #[arg(long, value_enum, default_value_t = StartArg::Rest)]
    start: StartArg,
    /// Quantity to record: a node name, or current:PART (repeatable; default: every node
    /// and the currents of sources, inductors, transformers and switches).
    #[arg(long = "probe")]
    probes: Vec<String>,
    /// Write the probed waveforms to this CSV file.
    #[arg(long)]
    trace: Option<PathBuf>,
    /// Print the summary as JSON.
    #[arg(long)]
    json: bool,
    /// Print solver counters (steps, Newton iterations, factorisations).
    #[arg(long)]
    stats: bool,
    /// List every discrete event (relay armature and contacts, switches, timers).
    #[arg(long)]
    events: bool,
    /// Supply disturbance to apply after power-up: a compact spec such as
    /// dip:40%:10cyc@90, interrupt:250cyc, swell:120%:25cyc, vary:70%:0cyc/1cyc/25cyc,
    /// ramp:100%-65%:20s (items joined by `;`, with gap:DURATION between), or a preset name
    /// from `sagtrip profiles` such as class3-dip-40 (optionally @DEGREES).
    #[arg(long, conflicts_with = "event_file")]
    event: Option<String>,
    /// Supply event from a TOML event file (a sequence; see docs/events.md).
    #[arg(long)]
    event_file: Option<PathBuf>,
    /// Nominal supply, e.g. 230V/50Hz (default: the mains source's own).
    #[arg(long)]
    nominal: Option<String>,
    /// The source part driven as the mains (default: the only sine voltage source).
    #[arg(long)]
    mains: Option<String>,
    /// The relay switching the load (default: the only relay).
    #[arg(long)]
    relay: Option<String>,
    /// The logic supply-rail node watched for brown-out (default: vcc, or the regulator
    /// output).
    #[arg(long)]
    rail: Option<String>,
    /// Rise and fall time of abrupt changes (default 5us).
    #[arg(long)]
    edge: Option<String>,
    /// With --event: draw the run as stacked panels into FILE.svg or FILE.png.
    #[arg(long)]
    plot: Option<PathBuf>,
    #[command(flatten)]
    limits: LimitArgs,
}

/// How long power-up and restoration may take before a run gives up.
#[derive(Args)]
struct LimitArgs {
    /// Longest power-up before events, e.g. 30s or 120s: the load must be connected by then
    /// (default: 10 s, or five times the circuit's longest RC time constant if longer).
    #[arg(long)]
    power_up_limit: Option<String>,
    /// Longest run after an event's end waiting for the load to reconnect and the circuit
    /// to settle (default as for --power-up-limit).
    #[arg(long)]
    restore_limit: Option<String>,
}

impl LimitArgs {
    /// Event options with these limits and the given nominal supply.
    fn options(&self, nominal: Option<&str>) -> Result<EventOptions, String> {
        Ok(EventOptions {
            nominal: nominal.map(nominal_option).transpose()?,
            settle_limit_s: time_option(&self.power_up_limit, "power-up-limit")?,
            restore_limit_s: time_option(&self.restore_limit, "restore-limit")?,
            ..EventOptions::default()
        })
    }
}

#[derive(Clone, Copy, PartialEq, Eq, ValueEnum)]
enum StartArg {
    /// Start at the DC operating point with the sources at their t = 0 values.
    OperatingPoint,
    /// Start from rest: capacitors discharged (or at their initial_voltage).
    Rest,
}

fn main() -> ExitCode {
    let cli = Cli::parse();
    let result = match cli.command {
        Command::Check { circuit } => check(circuit.as_deref()),
        Command::Run(args) => {
            if args.event.is_some() || args.event_file.is_some() {
                run_event_command(&args)
            } else {
                run(&args)
            }
        }
        Command::Profiles => Ok(profiles()),
        Command::Synth(args) => synth(&args),
        Command::Sweep(args) => sweep(&args),
        Command::Merge(args) => merge(&args),
        Command::Detect(args) => detect_command(&args),
        Command::Replay(args) => replay_command(&args),
        Command::Thresholds(args) => thresholds_command(&args),
        Command::Table(args) => table_command(&args),
    };
    match result {
        Ok(text) => {
            // A closed pipe (e.g. `| head`) is not an error worth a panic.
            let _ = std::io::stdout().write_all(text.as_bytes());
            ExitCode::SUCCESS
        }
        Err(message) => {
            eprintln!("error: {}", message.trim_end());
            ExitCode::FAILURE
        }
    }
}

/// Reads the circuit at `path`, or the built-in reference guard; returns it with the name
/// to report it under.
fn load_circuit(path: Option<&Path>) -> Result<(Circuit, String), String> {
    load_circuit_and_text(path).map(|(circuit, name, _)| (circuit, name))
}

/// As [`load_circuit`], also returning the file's text (to build tolerance cases from).
fn load_circuit_and_text(path: Option<&Path>) -> Result<(Circuit, String, String), String> {
    let (text, name) = match path {
        Some(path) => (
            std::fs::read_to_string(path)
                .map_err(|e| format!("cannot read circuit file {}: {e}", path.display()))?,
            path.display().to_string(),
        ),
        None => (
            builtin::REFERENCE_GUARD.to_string(),
            builtin::REFERENCE_GUARD_NAME.to_string(),
        ),
    };
    let circuit = parse_circuit(&text, &name).map_err(|e| e.to_string())?;
    Ok((circuit, name, text))
}

fn part_summary(spec: &PartSpec) -> String {
    use Quantity::*;
    let e = |v: f64, q: Quantity| Engineering(v, q).to_string();
    match spec {
        PartSpec::Resistor { resistance } => e(*resistance, Resistance),
        PartSpec::Capacitor { capacitance, .. } => e(*capacitance, Capacitance),
        PartSpec::Inductor {
            inductance,
            series_resistance,
            ..
        } => format!(
            "{}, {}",
            e(*inductance, Inductance),
            e(*series_resistance, Resistance)
        ),
        PartSpec::Transformer(t) => format!(
            "{} / {}, k = {}",
            e(t.primary_inductance, Inductance),
            e(t.secondary_inductance, Inductance),
            t.coupling
        ),
        PartSpec::VoltageSource(w) | PartSpec::CurrentSource(w) => w.to_string(),
        PartSpec::Diode(d) | PartSpec::Bridge(d) => format!(
            "Is = {}, n = {}{}",
            e(d.saturation_current, Current),
            d.emission_coefficient,
            d.breakdown
                .as_ref()
                .map(|b| format!(", breakdown {}", e(b.voltage, Voltage)))
                .unwrap_or_default()
        ),
        PartSpec::Switch(s) => format!(
            "on above {}, off below {}",
            e(s.on_voltage, Voltage),
            e(s.off_voltage, Voltage)
        ),
        PartSpec::Comparator(c) => format!(
            "gain {:e}, lag {}, hysteresis {}",
            c.gain,
            e(c.response_time, Time),
            e(c.hysteresis, Voltage)
        ),
        PartSpec::Mosfet(m) => format!(
            "Vth {}, K {}{}",
            e(m.threshold_voltage, Voltage),
            e(m.transconductance, Transconductance),
            if m.body_diode.is_some() {
                ", body diode"
            } else {
                ""
            }
        ),
        PartSpec::Bipolar(b) => format!(
            "Is {}, beta F {}, beta R {}",
            e(b.saturation_current, Current),
            b.forward_beta,
            b.reverse_beta
        ),
        PartSpec::Regulator(r) => format!(
            "{} out, dropout {}, limit {}",
            e(r.output_voltage, Voltage),
            e(r.dropout_voltage, Voltage),
            e(r.current_limit, Current)
        ),
        PartSpec::Relay(r) => format!(
            "coil {} / {}, pick-up {}, drop-out {}",
            e(r.coil_resistance, Resistance),
            e(r.coil_inductance, Inductance),
            e(r.pickup_current, Current),
            e(r.dropout_current, Current)
        ),
        PartSpec::Timer(_) => "1/3 and 2/3 supply thresholds".to_string(),
    }
}

fn check(path: Option<&Path>) -> Result<String, String> {
    let mut out = String::new();
    let (circuit, name) = load_circuit(path)?;
    say!(out, "{name}: valid");
    if !circuit.title.is_empty() {
        say!(out, "title: {}", circuit.title);
    }
    say!(out, "\nparts ({}):", circuit.parts.len());
    for part in &circuit.parts {
        let pins: Vec<String> = part
            .spec
            .pin_names()
            .iter()
            .zip(&part.pins)
            .filter(|(pin, _)| {
                !matches!(&part.spec, PartSpec::Relay(r) if **pin == "normally_closed" && !r.normally_closed_connected)
            })
            .map(|(pin, &node)| format!("{pin}={}", circuit.nodes[node]))
            .collect();
        say!(
            out,
            "  {:<14} {:<15} {:<40} {}",
            part.name,
            part.spec.kind_name(),
            pins.join(" "),
            part_summary(&part.spec)
        );
    }
    say!(
        out,
        "\nnodes ({}, gnd is the reference):",
        circuit.nodes.len()
    );
    for (i, node) in circuit.nodes.iter().enumerate() {
        let users: Vec<&str> = circuit
            .parts
            .iter()
            .filter(|p| {
                p.pins.iter().enumerate().any(|(k, &n)| {
                    n == i && !matches!(&p.spec, PartSpec::Relay(r) if k == 4 && !r.normally_closed_connected)
                })
            })
            .map(|p| p.name.as_str())
            .collect();
        say!(out, "  {:<14} {}", node, users.join(", "));
    }
    say!(out, "\nparameter sets ({}):", circuit.parameter_sets.len());
    for set in &circuit.parameter_sets {
        let values: Vec<String> = set
            .values
            .iter()
            .map(|(k, v)| format!("{k} = {v}"))
            .collect();
        say!(
            out,
            "  {:<14} {:<8} {}; used by: {}",
            set.name,
            set.family,
            values.join(", "),
            if set.used_by.is_empty() {
                "(none)".to_string()
            } else {
                set.used_by.join(", ")
            }
        );
    }
    if !circuit.tolerances.is_empty() {
        say!(
            out,
            "\nvalues with a tolerance ({}):",
            circuit.tolerances.len()
        );
        for t in &circuit.tolerances {
            say!(
                out,
                "  {:<44} {} (from {} to {}), line {}",
                t.field,
                significant(t.nominal),
                significant(t.min),
                significant(t.max),
                t.line
            );
        }
    }
    Ok(out)
}

fn time_option(text: &Option<String>, name: &str) -> Result<Option<f64>, String> {
    text.as_deref()
        .map(|t| {
            parse_value(t, Quantity::Time)
                .map_err(|e| format!("--{name}: {e}"))
                .and_then(|v| {
                    if v > 0.0 {
                        Ok(v)
                    } else {
                        Err(format!("--{name} must be positive, got {t}"))
                    }
                })
        })
        .transpose()
}

fn run(args: &RunArgs) -> Result<String, String> {
    let mut out = String::new();
    for (given, option) in [
        (args.plot.is_some(), "--plot"),
        (args.nominal.is_some(), "--nominal"),
        (args.mains.is_some(), "--mains"),
        (args.relay.is_some(), "--relay"),
        (args.rail.is_some(), "--rail"),
        (args.edge.is_some(), "--edge"),
        (args.limits.power_up_limit.is_some(), "--power-up-limit"),
        (args.limits.restore_limit.is_some(), "--restore-limit"),
    ] {
        if given {
            return Err(format!("{option} goes with --event or --event-file"));
        }
    }
    let (circuit, name) = load_circuit(args.circuit.as_deref())?;
    let mut settings = Settings::default();
    if let Some(step) = time_option(&args.max_step, "max-step")? {
        settings.max_step_s = step;
    }
    let has_relay = circuit
        .parts
        .iter()
        .any(|p| matches!(p.spec, PartSpec::Relay(_)));
    let mains_hz = circuit.mains_frequency_hz();
    let duration = time_option(&args.duration, "duration")?.unwrap_or(if has_relay {
        2.0
    } else {
        mains_hz.map_or(0.1, |f| 10.0 / f)
    });
    let probes = if args.probes.is_empty() {
        Probe::defaults(&circuit)
    } else {
        args.probes
            .iter()
            .map(|p| Probe::parse(p, &circuit).map_err(|e| format!("--probe {p}: {e}")))
            .collect::<Result<Vec<_>, _>>()?
    };

    let started = Instant::now();
    let mut sim = Simulator::new(&circuit, settings);
    let start = match args.start {
        StartArg::OperatingPoint => Start::OperatingPoint,
        StartArg::Rest => Start::Rest,
    };
    let mut state = sim.start(start).map_err(|e| format!("{name}: {e}"))?;
    let mut trace = Trace::new(probes);
    trace.record(sim.network(), &state);
    sim.advance(&mut state, duration, &mut trace)
        .map_err(|e| format!("{name}: {e}"))?;
    let wall = started.elapsed().as_secs_f64();

    if let Some(path) = &args.trace {
        write_atomic(path, |w| trace.write_csv(&circuit, w))
            .map_err(|e| format!("cannot write trace {}: {e}", path.display()))?;
    }

    // Settled values: over the last mains cycle, or the last tenth of the run.
    let window = mains_hz.map_or(0.1 * duration, |f| (1.0 / f).min(duration));
    let settled = settled_values(&circuit, &trace, window);
    let relays = relay_timelines(&circuit, &trace);

    if args.json {
        let value = serde_json::json!({
            "circuit": name,
            "title": circuit.title,
            "duration_s": duration,
            "settled_window_s": window,
            "probes": settled,
            "relays": relays,
            "events": trace.events.iter().map(|e| serde_json::json!({
                "time_s": e.time,
                "part": circuit.parts[e.part].name,
                "kind": e.kind,
            })).collect::<Vec<_>>(),
            "stats": state.stats,
            "wall_time_s": wall,
            "trace": args.trace.as_ref().map(|p| p.display().to_string()),
        });
        say!(out, "{}", pretty_json(&value));
        return Ok(out);
    }

    say!(
        out,
        "{name}{}",
        if circuit.title.is_empty() {
            String::new()
        } else {
            format!(": {}", circuit.title)
        }
    );
    say!(
        out,
        "simulated {} from {} in {} steps ({:.3} s wall, {:.0}x real time)",
        Engineering(duration, Quantity::Time),
        match start {
            Start::Rest => "rest",
            Start::OperatingPoint => "the operating point",
        },
        state.stats.accepted_steps,
        wall,
        duration / wall.max(1e-9)
    );
    for r in &relays {
        say!(out);
        match (
            r.first_pickup_s,
            r.first_contact_made_s,
            r.contact_settled_s,
        ) {
            (Some(pickup), made, settled) => {
                say!(
                    out,
                    "relay `{}` first picked up at {:.3} ms",
                    r.relay,
                    pickup * 1e3
                );
                if let Some(made) = made {
                    say!(
                        out,
                        "  normally-open contact first made at {:.3} ms",
                        made * 1e3
                    );
                }
                if let Some(settled) = settled {
                    say!(
                        out,
                        "  contact closed for good (after bounce) at {:.3} ms",
                        settled * 1e3
                    );
                }
                say!(
                    out,
                    "  {} armature transition{}; {} at the end",
                    r.armature_transitions,
                    if r.armature_transitions == 1 { "" } else { "s" },
                    if r.operated_at_end {
                        "picked up"
                    } else {
                        "released"
                    }
                );
            }
            (None, ..) => {
                say!(out, "relay `{}` never picked up", r.relay);
            }
        }
    }
    say!(
        out,
        "\nsettled values over the last {}:",
        Engineering(window, Quantity::Time)
    );
    say!(
        out,
        "{:<22} {:>14} {:>14} {:>14} {:>14}",
        "probe",
        "mean",
        "min",
        "max",
        "final"
    );
    for s in &settled {
        say!(
            out,
            "{:<22} {:>14.6} {:>14.6} {:>14.6} {:>14.6}",
            s.probe,
            s.mean,
            s.min,
            s.max,
            s.last
        );
    }
    if !trace.events.is_empty() && args.events {
        say!(out, "\ndiscrete events:");
        for e in &trace.events {
            say!(
                out,
                "  {:>12.6} ms  {:<14} {:?}",
                e.time * 1e3,
                circuit.parts[e.part].name,
                e.kind
            );
        }
    }
    if args.stats {
        let s = &state.stats;
        say!(
            out,
            "\nsolver: {} accepted steps, {} rejected, {} Newton failures, {} Newton iterations, {} factorisations ({} with a new pivot order), {} restarts, {} located events",
            s.accepted_steps,
            s.rejected_steps,
            s.newton_failures,
            s.newton_iterations,
            s.factorizations,
            s.reorders,
            s.restarts,
            s.located_events
        );
    }
    if let Some(path) = &args.trace {
        say!(
            out,
            "\ntrace: {} rows x {} probes written to {}",
            trace.time.len(),
            trace.probes.len(),
            path.display()
        );
    }
    Ok(out)
}

fn profiles() -> String {
    let mut out = String::new();
    say!(
        out,
        "Preferred test levels and durations of IEC 61000-4-11 (use with --event NAME[@DEGREES]):\n"
    );
    say!(
        out,
        "{:<22} {:<6} {:<28} {:<28} source",
        "name",
        "class",
        "at 50 Hz",
        "at 60 Hz"
    );
    for p in iec_presets() {
        say!(
            out,
            "{:<22} {:<6} {:<28} {:<28} {}",
            p.name,
            p.class,
            p.profile_50hz.spec(),
            p.profile_60hz.spec(),
            p.table
        );
    }
    say!(
        out,
        "\nLevels are the residual voltage in % of nominal; abrupt changes start at 0 degrees\n\
         unless @DEGREES is given and take {} to change. Each test is normally applied three\n\
         times at least 10 s apart; sagtrip simulates one application.",
        Engineering(DEFAULT_EDGE_S, Quantity::Time)
    );
    out
}

/// Reads `--nominal 230V/50Hz`.
fn nominal_option(text: &str) -> Result<(f64, f64), String> {
    let (v, f) = text
        .split_once('/')
        .ok_or_else(|| format!("--nominal {text}: expected VOLTS/HERTZ, e.g. 230V/50Hz"))?;
    let v = parse_value(v, Quantity::Voltage).map_err(|e| format!("--nominal {text}: {e}"))?;
    let f = parse_value(f, Quantity::Frequency).map_err(|e| format!("--nominal {text}: {e}"))?;
    if v <= 0.0 || f <= 0.0 {
        return Err(format!("--nominal {text}: both values must be positive"));
    }
    Ok((v, f))
}

fn run_event_command(args: &RunArgs) -> Result<String, String> {
    let mut out = String::new();
    for (given, option) in [
        (args.duration.is_some(), "--duration"),
        (args.events, "--events"),
        (args.stats, "--stats"),
        (args.start != StartArg::Rest, "--start"),
    ] {
        if given {
            return Err(format!(
                "{option} does not go with --event (the event run powers up from rest and runs until the protector has restored)"
            ));
        }
    }
    let (circuit, name) = load_circuit(args.circuit.as_deref())?;
    let mut options = EventOptions {
        mains: args.mains.clone(),
        relay: args.relay.clone(),
        rail: args.rail.clone(),
        ..args.limits.options(args.nominal.as_deref())?
    };
    if let Some(step) = time_option(&args.max_step, "max-step")? {
        options.settings.max_step_s = step;
    }
    let edge = time_option(&args.edge, "edge")?.unwrap_or(DEFAULT_EDGE_S);
    options.probes = args
        .probes
        .iter()
        .map(|p| Probe::parse(p, &circuit).map_err(|e| format!("--probe {p}: {e}")))
        .collect::<Result<Vec<_>, _>>()?;
    if args.plot.is_some() {
        for p in sagtrip::plot::plot_probes(&circuit) {
            if !options.probes.contains(&p) {
                options.probes.push(p);
            }
        }
    }
    if let Some(path) = &args.plot {
        check_plot_name(path)?;
    }
    let mains =
        find_mains(&circuit, options.mains.as_deref()).map_err(|e| format!("{name}: {e}"))?;
    let frequency = options.nominal.map_or(mains.frequency_hz, |n| n.1);
    let profile = match &args.event_file {
        Some(path) => {
            let text = std::fs::read_to_string(path)
                .map_err(|e| format!("cannot read event file {}: {e}", path.display()))?;
            let mut profile =
                sagtrip::profile::parse_event_file(&text, &path.display().to_string())
                    .map_err(|e| e.to_string())?;
            if args.edge.is_some() {
                profile.edge_s = edge;
            }
            profile
        }
        None => {
            let spec = args.event.as_deref().unwrap_or_default();
            resolve(spec, frequency, edge).map_err(|e| format!("--event: {e}"))?
        }
    };

    let started = Instant::now();
    let result = run_event(&circuit, &profile, &options).map_err(|e| format!("{name}: {e}"))?;
    let wall = started.elapsed().as_secs_f64();
    if let Some(path) = &args.trace {
        write_atomic(path, |w| result.trace.write_csv(&circuit, w))
            .map_err(|e| format!("cannot write trace {}: {e}", path.display()))?;
    }
    if let Some(path) = &args.plot {
        write_plot(
            path,
            |p| sagtrip::plot::event_png(&result, &circuit, &name, p),
            || sagtrip::plot::event_svg(&result, &circuit, &name),
        )?;
    }
    let m = &result.measurements;
    if args.json {
        let mut value = serde_json::to_value(m).unwrap_or_default();
        if let serde_json::Value::Object(map) = &mut value {
            let extra = serde_json::json!({
                "circuit": name,
                "event": result.event,
                "nominal_rms_v": result.nominal_rms_v,
                "frequency_hz": result.frequency_hz,
                "phase_deg": profile.phase_deg,
                "onset_s": result.onset_s,
                "event_end_s": result.event_end_s,
                "run_end_s": result.run_end_s,
                "settled_at_s": result.settled_at_s,
                "power_up_limit_s": result.settle_limit_s,
                "restore_limit_s": result.restore_limit_s,
                "settled_after": result.settled_after,
                "min_rail_v": result.min_rail_v,
                "rail": result.rail,
                "comparator_toggles": result.comparator_toggles,
                "stats": result.stats,
                "wall_time_s": wall,
                "trace": args.trace.as_ref().map(|p| p.display().to_string()),
                "plot": args.plot.as_ref().map(|p| p.display().to_string()),
            });
            if let serde_json::Value::Object(extra) = extra {
                map.extend(extra);
            }
        }
        say!(out, "{}", pretty_json(&value));
        return Ok(out);
    }
    let ms = |v: Option<f64>| v.map_or("-".to_string(), |v| format!("{v:.2} ms"));
    say!(out, "{name}: {}", circuit.title);
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
    say!(
        out,
        "\nrun ended at {:.3} s ({}); {} steps, {:.3} s wall",
        result.run_end_s,
        if result.settled_after {
            "restored and settled"
        } else {
            "limit reached before the protector restored and settled"
        },
        result.stats.accepted_steps,
        wall
    );
    if let Some(path) = &args.trace {
        say!(
            out,
            "trace: {} rows written to {}",
            result.trace.time.len(),
            path.display()
        );
    }
    if let Some(path) = &args.plot {
        say!(out, "plot: {}", path.display());
    }
    Ok(out)
}

/// Reads a duration option such as `10cyc` or `200ms` in seconds at `frequency_hz`.
fn duration_option(text: &str, name: &str, frequency_hz: f64) -> Result<f64, String> {
    let text = text.trim();
    let seconds = if let Some(n) = text.strip_suffix("cyc") {
        n.trim()
            .parse::<f64>()
            .map_err(|_| format!("--{name} {text}: expected e.g. 10cyc or 200ms"))?
            / frequency_hz
    } else {
        parse_value(text, Quantity::Time).map_err(|e| format!("--{name}: {e}"))?
    };
    if seconds.is_finite() && seconds >= 0.0 {
        Ok(seconds)
    } else {
        Err(format!("--{name} {text}: must not be negative"))
    }
}

fn synth(args: &SynthArgs) -> Result<String, String> {
    use sagtrip::synth::{samples, wav_bytes, SampleFormat, SynthOptions};
    let mut out = String::new();
    let (rms, frequency) = nominal_option(&args.nominal)?;
    let edge = time_option(&args.edge, "edge")?.unwrap_or(DEFAULT_EDGE_S);
    let profile = resolve(&args.spec, frequency, edge).map_err(|e| format!("event: {e}"))?;
    if args.rate < 1000 {
        return Err(format!(
            "--rate {}: at least 1000 samples per second",
            args.rate
        ));
    }
    let full_scale = match &args.volts_per_full_scale {
        Some(text) => parse_value(text, Quantity::Voltage)
            .map_err(|e| format!("--volts-per-full-scale: {e}"))
            .and_then(|v| {
                if v > 0.0 {
                    Ok(v)
                } else {
                    Err("--volts-per-full-scale must be positive".to_string())
                }
            })?,
        None => SynthOptions::default_full_scale(rms),
    };
    let options = SynthOptions {
        rms_v: rms,
        frequency_hz: frequency,
        sample_rate: args.rate,
        lead_s: duration_option(&args.lead, "lead", frequency)?,
        tail_s: duration_option(&args.tail, "tail", frequency)?,
        volts_per_full_scale: full_scale,
        format: match args.format {
            FormatArg::Int16 => SampleFormat::Int16,
            FormatArg::Int24 => SampleFormat::Int24,
            FormatArg::Float32 => SampleFormat::Float32,
        },
        harmonics: match &args.harmonics {
            None => Vec::new(),
            Some(text) => text
                .split(',')
                .map(|h| {
                    let (order, pct) = h.split_once(':')?;
                    Some((
                        order.trim().parse::<u32>().ok()?,
                        pct.trim().trim_end_matches('%').parse::<f64>().ok()? / 100.0,
                    ))
                })
                .collect::<Option<Vec<_>>>()
                .ok_or_else(|| {
                    format!("--harmonics {text}: expected ORDER:PERCENT pairs, e.g. 3:5,5:3")
                })?,
        },
        noise: if args.noise >= 0.0 {
            args.noise / 100.0
        } else {
            return Err("--noise must not be negative".into());
        },
    };
    let volts = samples(&profile, &options);
    let bytes = wav_bytes(&volts, &options).map_err(|e| e.to_string())?;
    write_atomic(&args.out, |w| w.write_all(&bytes))
        .map_err(|e| format!("cannot write {}: {e}", args.out.display()))?;
    let period = 1.0 / frequency;
    let onset = (options.lead_s / period).round() * period
        + profile.phase_deg.rem_euclid(360.0) / 360.0 * period;
    say!(
        out,
        "{}: event {} on {rms} V / {frequency} Hz, {} samples at {} Hz ({:.3} s), {}",
        args.out.display(),
        profile.spec(),
        volts.len(),
        args.rate,
        volts.len() as f64 / f64::from(args.rate),
        match args.format {
            FormatArg::Int16 => "16-bit integer",
            FormatArg::Int24 => "24-bit integer",
            FormatArg::Float32 => "32-bit float",
        }
    );
    say!(
        out,
        "scale: {full_scale:.3} V per full scale (a sample of 1.0 is {full_scale:.3} V)"
    );
    say!(out, "onset at {onset:.6} s into the file");
    Ok(out)
}

/// Reads FROM:TO:STEP (percent) into the list of levels.
fn level_range(text: &str, name: &str) -> Result<Vec<f64>, String> {
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
    if *step <= 0.0 || to < from || *from < 0.0 {
        return Err(format!(
            "--{name} {text}: need 0 <= FROM <= TO and STEP > 0"
        ));
    }
    let count = ((to - from) / step + 1e-9).floor() as usize + 1;
    Ok((0..count).map(|k| from + step * k as f64).collect())
}

/// The journal of a sweep in a folder: its settings, and the points and boundary points
/// appended as they complete, so that an interrupted sweep loses nothing.
struct Journal {
    points: std::sync::Mutex<std::fs::File>,
    boundary: std::sync::Mutex<std::fs::File>,
    duration_boundary: std::sync::Mutex<std::fs::File>,
}

/// What a journal folder holds on opening.
type JournalContents = (
    Journal,
    Vec<sagtrip::sweep::Point>,
    Vec<(String, sagtrip::sweep::BoundaryPoint)>,
    Vec<sagtrip::sweep::DurationBoundaryPoint>,
);

impl Journal {
    /// Opens `dir` for a sweep with `settings`: a fresh folder, or with `resume` one holding
    /// the same sweep (its completed points and boundary points are returned).
    fn open(
        dir: &Path,
        settings: &serde_json::Value,
        resume: bool,
    ) -> Result<JournalContents, String> {
        use sagtrip::sweep::{BOUNDARY_HEADER, DURATION_BOUNDARY_HEADER, POINTS_HEADER};
        std::fs::create_dir_all(dir)
            .map_err(|e| format!("cannot create {}: {e}", dir.display()))?;
        let settings_path = dir.join("sweep-settings.json");
        let (points, boundary, duration_boundary) = if settings_path.exists() {
            if !resume {
                return Err(format!(
                    "{} already holds a sweep: add --resume to continue it, or choose another folder",
                    dir.display()
                ));
            }
            let text = std::fs::read_to_string(&settings_path)
                .map_err(|e| format!("cannot read {}: {e}", settings_path.display()))?;
            let before: serde_json::Value = serde_json::from_str(&text)
                .map_err(|e| format!("{}: {e}", settings_path.display()))?;
            if &before != settings {
                return Err(format!(
                    "{} holds a sweep with other settings; --resume needs the same circuit, grid and options",
                    dir.display()
                ));
            }
            (
                read_journal(&dir.join("points.csv")),
                read_journal(&dir.join("boundary.csv")),
                read_journal(&dir.join("duration-boundary.csv")),
            )
        } else {
            write_atomic(&settings_path, |w| {
                w.write_all(
                    serde_json::to_string_pretty(settings)
                        .unwrap_or_default()
                        .as_bytes(),
                )
            })
            .map_err(|e| format!("cannot write {}: {e}", settings_path.display()))?;
            (Vec::new(), Vec::new(), Vec::new())
        };
        let points_done = points
            .iter()
            .filter_map(|l| sagtrip::sweep::parse_point_line(l))
            .collect();
        let boundary_done = boundary
            .iter()
            .filter_map(|l| sagtrip::sweep::parse_boundary_line(l))
            .collect();
        let duration_boundary_done = duration_boundary
            .iter()
            .filter_map(|l| sagtrip::sweep::parse_duration_boundary_line(l))
            .collect();
        let open = |name: &str, header: &str| -> Result<std::fs::File, String> {
            let path = dir.join(name);
            let fresh = !path.exists();
            let mut file = std::fs::OpenOptions::new()
                .create(true)
                .append(true)
                .open(&path)
                .map_err(|e| format!("cannot open {}: {e}", path.display()))?;
            if fresh {
                writeln!(file, "{header}")
                    .map_err(|e| format!("cannot write {}: {e}", path.display()))?;
            }
            Ok(file)
        };
        Ok((
            Journal {
                points: std::sync::Mutex::new(open("points.csv", POINTS_HEADER)?),
                boundary: std::sync::Mutex::new(open("boundary.csv", BOUNDARY_HEADER)?),
                duration_boundary: std::sync::Mutex::new(open(
                    "duration-boundary.csv",
                    DURATION_BOUNDARY_HEADER,
                )?),
            },
            points_done,
            boundary_done,
            duration_boundary_done,
        ))
    }

    fn append(file: &std::sync::Mutex<std::fs::File>, line: &str) {
        if let Ok(mut f) = file.lock() {
            // A failed append only costs the point on a later resume.
            let _ = writeln!(f, "{line}").and_then(|()| f.flush());
        }
    }
}

/// The lines after the header of a journal file, or none.
fn read_journal(path: &Path) -> Vec<String> {
    std::fs::read_to_string(path)
        .map(|t| t.lines().skip(1).map(String::from).collect())
        .unwrap_or_default()
}

/// Reads `--shard K/N`.
fn shard_option(text: &str) -> Result<(usize, usize), String> {
    let parsed = text.split_once('/').and_then(|(k, n)| {
        Some((
            k.trim().parse::<usize>().ok()?,
            n.trim().parse::<usize>().ok()?,
        ))
    });
    match parsed {
        Some((k, n)) if n >= 1 && (1..=n).contains(&k) => Ok((k, n)),
        _ => Err(format!(
            "--shard {text}: expected K/N with 1 <= K <= N, e.g. 2/8"
        )),
    }
}

fn sweep(args: &SweepArgs) -> Result<String, String> {
    use sagtrip::sweep::{
        boundary_line, log_durations, point_line, refine_boundary, run_points, shard, Grid,
    };
    let (circuit, name) = load_circuit(args.circuit.as_deref())?;
    let options = args.limits.options(args.nominal.as_deref())?;
    let mut levels = level_range(&args.levels, "levels")?;
    if levels.iter().any(|&l| l >= 100.0) {
        return Err("--levels: dip levels are below 100% (use --swells above it)".into());
    }
    let swells = args
        .swells
        .as_deref()
        .map(|s| level_range(s, "swells"))
        .transpose()?
        .unwrap_or_default();
    if swells.iter().any(|&l| l <= 100.0) {
        return Err("--swells: swell levels are above 100%".into());
    }
    levels.extend(&swells);
    let phases: Vec<f64> = args
        .phases
        .split(',')
        .map(|p| p.trim().parse::<f64>())
        .collect::<Result<_, _>>()
        .map_err(|_| format!("--phases {}: expected degrees, e.g. 0,90", args.phases))?;
    let (k, n) = args
        .shard
        .as_deref()
        .map(shard_option)
        .transpose()?
        .unwrap_or((1, 1));
    if args.resume && args.out.is_none() {
        return Err("--resume needs --out DIR (the folder of the sweep to continue)".into());
    }
    let started = Instant::now();
    let settled =
        sagtrip::scenario::settle(&circuit, &options).map_err(|e| format!("{name}: {e}"))?;
    let settle_wall = started.elapsed().as_secs_f64();
    let frequency = settled.frequency_hz;
    let (first, last) = args.durations.split_once(':').ok_or_else(|| {
        format!(
            "--durations {}: expected SHORTEST:LONGEST, e.g. 0.5cyc:10s",
            args.durations
        )
    })?;
    let first = duration_option(first, "durations", frequency)?;
    let last = duration_option(last, "durations", frequency)?;
    if first <= 0.0 || last < first || args.duration_count == 0 {
        return Err("--durations: need 0 < SHORTEST <= LONGEST and a positive count".into());
    }
    let grid = Grid {
        levels_pct: levels,
        durations_s: log_durations(first, last, args.duration_count),
        phases_deg: phases,
    };
    let settings = serde_json::json!({
        "circuit": name,
        "title": circuit.title,
        "nominal_rms_v": settled.rms,
        "frequency_hz": frequency,
        "levels_pct": grid.levels_pct,
        "swells": !swells.is_empty(),
        "durations_s": grid.durations_s,
        "phases_deg": grid.phases_deg,
        "resolution_pct": args.resolution,
        "refine": !args.no_refine,
        "shard": format!("{k}/{n}"),
    });
    let (journal, done_points, done_boundary, done_durations) = match &args.out {
        Some(dir) => {
            let (j, p, b, d) = Journal::open(dir, &settings, args.resume)?;
            (Some(j), p, b, d)
        }
        None => (None, Vec::new(), Vec::new(), Vec::new()),
    };

    // This shard's points not yet in the journal.
    let mine = shard(&grid.points(), k, n);
    let todo: Vec<(f64, f64, f64)> = mine
        .iter()
        .copied()
        .filter(|&(l, d, p)| {
            !done_points
                .iter()
                .any(|x| x.level_pct == l && x.duration_s == d && x.phase_deg == p)
        })
        .collect();
    let bar = if args.quiet {
        indicatif::ProgressBar::hidden()
    } else {
        indicatif::ProgressBar::new(todo.len() as u64)
    };
    bar.set_style(
        indicatif::ProgressStyle::with_template(
            "{bar:40} {pos}/{len} points, {elapsed} elapsed, about {eta} left",
        )
        .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar()),
    );
    let fresh = run_points(&settled, &circuit, &todo, DEFAULT_EDGE_S, &|p| {
        if let Some(j) = &journal {
            Journal::append(&j.points, &point_line(p));
        }
        bar.inc(1);
    });
    bar.finish_and_clear();
    let mut points = done_points;
    points.extend(fresh);

    // Boundaries for this shard's durations not yet in the journal.
    let mut boundaries = done_boundary;
    let my_durations = shard(&grid.durations_s, k, n);
    let mut sides: Vec<(&str, (f64, f64))> = Vec::new();
    if !args.no_refine {
        sides.push(("dip", (0.0, 100.0)));
        if !swells.is_empty() {
            sides.push((
                "swell",
                (100.0, swells.iter().copied().fold(100.0, f64::max)),
            ));
        }
    }
    // The durations of the level boundaries, and the levels of the duration boundary,
    // still to refine.
    let level_todo: Vec<(&str, (f64, f64), f64)> = sides
        .iter()
        .flat_map(|&(side, range)| my_durations.iter().map(move |&d| (side, range, d)))
        .filter(|(side, _, d)| {
            !boundaries
                .iter()
                .any(|(s, b)| s == side && b.duration_s == *d)
        })
        .collect();
    let mut durations_done = done_durations;
    let duration_todo: Vec<f64> = if args.no_refine {
        Vec::new()
    } else {
        shard(&grid.levels_pct, k, n)
            .into_iter()
            .filter(|l| !durations_done.iter().any(|b| b.level_pct == *l))
            .collect()
    };
    let bar = if args.quiet {
        indicatif::ProgressBar::hidden()
    } else {
        indicatif::ProgressBar::new((level_todo.len() + duration_todo.len()) as u64)
    };
    bar.set_style(
        indicatif::ProgressStyle::with_template(
            "{bar:40} {pos}/{len} boundary points ({msg}), {elapsed} elapsed, about {eta} left",
        )
        .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar()),
    );
    for (side, range, d) in level_todo {
        bar.set_message(format!("{side} level at {}", short_duration(d)));
        {
            let b = refine_boundary(
                &settled,
                &circuit,
                d,
                &grid.phases_deg,
                range,
                args.resolution,
                DEFAULT_EDGE_S,
            )
            .map_err(|e| format!("{name}: {side} boundary at {}: {e}", short_duration(d)))?;
            if let Some(j) = &journal {
                Journal::append(&j.boundary, &boundary_line(side, &b));
            }
            boundaries.push((side.to_string(), b));
            bar.inc(1);
        }
    }
    let known = sagtrip::sweep::cells(&points);
    let range = (
        grid.durations_s
            .iter()
            .copied()
            .fold(f64::INFINITY, f64::min),
        grid.durations_s.iter().copied().fold(0.0, f64::max),
    );
    for level in duration_todo {
        bar.set_message(format!("longest ride-through at {level}%"));
        let b = sagtrip::sweep::refine_duration_boundary(
            &settled,
            &circuit,
            level,
            &grid.phases_deg,
            range,
            &known,
            DEFAULT_EDGE_S,
        )
        .map_err(|e| format!("{name}: longest ride-through: {e}"))?;
        if let Some(j) = &journal {
            Journal::append(
                &j.duration_boundary,
                &sagtrip::sweep::duration_boundary_line(&b),
            );
        }
        durations_done.push(b);
        bar.inc(1);
    }
    bar.finish_and_clear();
    let wall = started.elapsed().as_secs_f64();
    report_sweep(
        &SweepReport {
            name: &name,
            title: &circuit.title,
            grid: &grid,
            points: &points,
            boundaries: &boundaries,
            duration_boundary: &durations_done,
            frequency_hz: frequency,
            resolution_pct: args.resolution,
            shard: (k, n),
            wall_s: wall,
            settle_wall_s: Some(settle_wall),
        },
        args.out.as_deref(),
        args.plot.as_deref(),
        args.json,
    )
}

/// Everything a sweep report shows.
struct SweepReport<'a> {
    name: &'a str,
    title: &'a str,
    grid: &'a sagtrip::sweep::Grid,
    points: &'a [sagtrip::sweep::Point],
    boundaries: &'a [(String, sagtrip::sweep::BoundaryPoint)],
    duration_boundary: &'a [sagtrip::sweep::DurationBoundaryPoint],
    frequency_hz: f64,
    resolution_pct: f64,
    shard: (usize, usize),
    wall_s: f64,
    /// Wall time of the one power-up all points share.
    settle_wall_s: Option<f64>,
}

/// Writes sweep.json (and the plot), and renders the text or JSON report.
fn report_sweep(
    r: &SweepReport<'_>,
    out_dir: Option<&Path>,
    plot: Option<&Path>,
    json: bool,
) -> Result<String, String> {
    use sagtrip::sweep::{cells, in_grid_order, Outcome};
    let mut out = String::new();
    let points = in_grid_order(r.grid, r.points);
    let map = cells(&points);
    let side = |s: &str| -> Vec<sagtrip::sweep::BoundaryPoint> {
        let mut list: Vec<_> = r
            .boundaries
            .iter()
            .filter(|(x, _)| x == s)
            .map(|(_, b)| b.clone())
            .collect();
        list.sort_by(|a, b| a.duration_s.total_cmp(&b.duration_s));
        list
    };
    let (dips, swells) = (side("dip"), side("swell"));
    let mut longest = r.duration_boundary.to_vec();
    longest.sort_by(|a, b| a.level_pct.total_cmp(&b.level_pct));
    let failed = points
        .iter()
        .filter(|p| p.outcome == Outcome::Failed)
        .count();
    let value = serde_json::json!({
        "circuit": r.name,
        "title": r.title,
        "frequency_hz": r.frequency_hz,
        "shard": format!("{}/{}", r.shard.0, r.shard.1),
        "points": points,
        "cells": map,
        "dip_boundary": dips,
        "swell_boundary": swells,
        "duration_boundary": longest,
        "wall_time_s": r.wall_s,
        "power_up_wall_time_s": r.settle_wall_s,
    });
    if let Some(dir) = out_dir {
        write_atomic(&dir.join("sweep.json"), |w| {
            w.write_all(
                serde_json::to_string_pretty(&value)
                    .unwrap_or_default()
                    .as_bytes(),
            )
        })
        .map_err(|e| format!("cannot write sweep.json: {e}"))?;
    }
    if let Some(path) = plot {
        let mut sorted_levels = r.grid.levels_pct.clone();
        sorted_levels.sort_by(f64::total_cmp);
        let map_data = sagtrip::plot::MapData {
            title: format!("Trip map: {} ({})", r.title, r.name),
            cells: &map,
            durations_s: &r.grid.durations_s,
            levels_pct: &sorted_levels,
            boundaries: vec![&dips, &swells],
            duration_boundary: &longest,
            frequency_hz: r.frequency_hz,
        };
        write_plot(
            path,
            |p| sagtrip::plot::map_png(&map_data, p),
            || sagtrip::plot::map_svg(&map_data),
        )?;
    }
    if json {
        say!(out, "{}", pretty_json(&value));
        return Ok(out);
    }
    say!(out, "{}: {}", r.name, r.title);
    say!(
        out,
        "{} points ({} levels x {} durations x {} phases{}) in {:.1} s{}",
        points.len(),
        r.grid.levels_pct.len(),
        r.grid.durations_s.len(),
        r.grid.phases_deg.len(),
        if r.shard.1 > 1 {
            format!(", shard {} of {}", r.shard.0, r.shard.1)
        } else {
            String::new()
        },
        r.wall_s,
        if failed > 0 {
            format!(", {failed} FAILED")
        } else {
            String::new()
        }
    );
    if let Some(settle) = r.settle_wall_s {
        say!(
            out,
            "one shared power-up took {settle:.2} s; every point ran from its settled state"
        );
    }
    say!(
        out,
        "\nworst case over phases: . rides through, T trips, C chatters, ! failed, blank not run\n"
    );
    let mut header = format!("{:>8} ", "level");
    for d in &r.grid.durations_s {
        header += &format!("{:>8}", short_duration(*d));
    }
    say!(out, "{header}");
    let mut levels = r.grid.levels_pct.clone();
    levels.sort_by(|a, b| b.total_cmp(a));
    for l in levels {
        let mut row = format!("{:>7}% ", l);
        for &d in &r.grid.durations_s {
            let c = map.iter().find(|c| c.level_pct == l && c.duration_s == d);
            let mark = match c.map(|c| (c.outcome, c.trip_latency_ms)) {
                Some((Outcome::Trips, Some(t))) => format!("T{t:.0}"),
                Some((Outcome::Trips, None)) => "T".into(),
                Some((Outcome::Chatters, _)) => "C".into(),
                Some((Outcome::RidesThrough, _)) => ".".into(),
                Some((Outcome::Failed, _)) => "!".into(),
                None => String::new(),
            };
            row += &format!("{mark:>8}");
        }
        say!(out, "{row}");
    }
    say!(
        out,
        "(T followed by the longest trip latency over the phases, ms)"
    );
    for (side, list) in [("dip", &dips), ("swell", &swells)] {
        if list.is_empty() {
            continue;
        }
        say!(
            out,
            "\n{side} boundary (refined to +/- {} % of nominal):",
            r.resolution_pct
        );
        for b in list {
            match b.level_pct {
                Some(l) => {
                    say!(out, "  {:>10}  {:6.2} %", short_duration(b.duration_s), l);
                }
                None => {
                    say!(out, "  {:>10}  none in range", short_duration(b.duration_s));
                }
            }
        }
    }
    if !longest.is_empty() {
        use sagtrip::sweep::DurationSearch;
        say!(
            out,
            "\nlongest event ridden through at every phase (refined to 1% of the duration or 0.5 ms):"
        );
        for b in &longest {
            let text = match (b.status, b.longest_ride_through_s, b.shortest_trip_s) {
                (DurationSearch::Found, Some(ride), Some(trip)) => format!(
                    "{} (trips at {})",
                    sagtrip::units::format_duration(ride),
                    sagtrip::units::format_duration(trip)
                ),
                (DurationSearch::RidesThroughAll, Some(ride), _) => {
                    format!(
                        "at least {} (the longest searched)",
                        sagtrip::units::format_duration(ride)
                    )
                }
                (_, _, Some(trip)) => {
                    format!(
                        "none: trips at {} (the shortest searched)",
                        sagtrip::units::format_duration(trip)
                    )
                }
                _ => "-".into(),
            };
            say!(out, "  {:>7}%  {text}", b.level_pct);
        }
    }
    if let Some(dir) = out_dir {
        say!(
            out,
            "\nwritten: {}/points.csv, boundary.csv, duration-boundary.csv, sweep.json",
            dir.display()
        );
    }
    if let Some(path) = plot {
        say!(out, "map: {}", path.display());
    }
    Ok(out)
}

/// Joins the folders of a sharded sweep into one result.
fn merge(args: &MergeArgs) -> Result<String, String> {
    use sagtrip::sweep::{parse_boundary_line, parse_point_line, Grid};
    let mut settings: Option<serde_json::Value> = None;
    let mut points = Vec::new();
    let mut boundaries = Vec::new();
    let mut durations: Vec<sagtrip::sweep::DurationBoundaryPoint> = Vec::new();
    for dir in &args.folders {
        let path = dir.join("sweep-settings.json");
        let text = std::fs::read_to_string(&path)
            .map_err(|e| format!("cannot read {}: {e}", path.display()))?;
        let mut s: serde_json::Value =
            serde_json::from_str(&text).map_err(|e| format!("{}: {e}", path.display()))?;
        if let serde_json::Value::Object(m) = &mut s {
            m.remove("shard");
        }
        match &settings {
            None => settings = Some(s),
            Some(first) if *first != s => {
                return Err(format!(
                    "{} holds a sweep with other settings than {}: only shards of one sweep merge",
                    dir.display(),
                    args.folders[0].display()
                ))
            }
            Some(_) => {}
        }
        points.extend(
            read_journal(&dir.join("points.csv"))
                .iter()
                .filter_map(|l| parse_point_line(l)),
        );
        boundaries.extend(
            read_journal(&dir.join("boundary.csv"))
                .iter()
                .filter_map(|l| parse_boundary_line(l)),
        );
        durations.extend(
            read_journal(&dir.join("duration-boundary.csv"))
                .iter()
                .filter_map(|l| sagtrip::sweep::parse_duration_boundary_line(l)),
        );
    }
    durations.sort_by(|a, b| a.level_pct.total_cmp(&b.level_pct));
    let settings = settings.ok_or("merge needs at least one folder")?;
    let numbers = |key: &str| -> Vec<f64> {
        settings[key]
            .as_array()
            .map(|a| a.iter().filter_map(serde_json::Value::as_f64).collect())
            .unwrap_or_default()
    };
    let grid = Grid {
        levels_pct: numbers("levels_pct"),
        durations_s: numbers("durations_s"),
        phases_deg: numbers("phases_deg"),
    };
    std::fs::create_dir_all(&args.out)
        .map_err(|e| format!("cannot create {}: {e}", args.out.display()))?;
    let ordered = sagtrip::sweep::in_grid_order(&grid, &points);
    write_atomic(&args.out.join("points.csv"), |w| {
        writeln!(w, "{}", sagtrip::sweep::POINTS_HEADER)?;
        for p in &ordered {
            writeln!(w, "{}", sagtrip::sweep::point_line(p))?;
        }
        Ok(())
    })
    .map_err(|e| format!("cannot write points.csv: {e}"))?;
    write_atomic(&args.out.join("boundary.csv"), |w| {
        writeln!(w, "{}", sagtrip::sweep::BOUNDARY_HEADER)?;
        for (side, b) in &boundaries {
            writeln!(w, "{}", sagtrip::sweep::boundary_line(side, b))?;
        }
        Ok(())
    })
    .map_err(|e| format!("cannot write boundary.csv: {e}"))?;
    write_atomic(&args.out.join("duration-boundary.csv"), |w| {
        writeln!(w, "{}", sagtrip::sweep::DURATION_BOUNDARY_HEADER)?;
        for b in &durations {
            writeln!(w, "{}", sagtrip::sweep::duration_boundary_line(b))?;
        }
        Ok(())
    })
    .map_err(|e| format!("cannot write duration-boundary.csv: {e}"))?;
    let missing = grid.points().len().saturating_sub(ordered.len());
    let name = settings["circuit"].as_str().unwrap_or("").to_string();
    let title = settings["title"].as_str().unwrap_or("").to_string();
    let mut text = report_sweep(
        &SweepReport {
            name: &name,
            title: &title,
            grid: &grid,
            points: &ordered,
            boundaries: &boundaries,
            duration_boundary: &durations,
            frequency_hz: settings["frequency_hz"].as_f64().unwrap_or(50.0),
            resolution_pct: settings["resolution_pct"].as_f64().unwrap_or(0.5),
            shard: (1, 1),
            wall_s: 0.0,
            settle_wall_s: None,
        },
        Some(&args.out),
        args.plot.as_deref(),
        false,
    )?;
    if missing > 0 {
        text += &format!("WARNING: {missing} grid points are in none of the folders (a shard not run or not finished)\n");
    }
    Ok(text)
}

/// Writes a plot as SVG or PNG by the file's extension, whole or not at all.
fn write_plot(
    path: &Path,
    png: impl FnOnce(&Path) -> Result<(), String>,
    svg: impl FnOnce() -> Result<String, String>,
) -> Result<(), String> {
    match path.extension().and_then(|e| e.to_str()) {
        Some("png") => {
            let temp = path.with_extension("png.partial.png");
            png(&temp)
                .and_then(|()| std::fs::rename(&temp, path).map_err(|e| e.to_string()))
                .map_err(|e| {
                    let _ = std::fs::remove_file(&temp);
                    format!("cannot write plot {}: {e}", path.display())
                })
        }
        Some("svg") => {
            let text = svg()?;
            write_atomic(path, |w| w.write_all(text.as_bytes()))
                .map_err(|e| format!("cannot write plot {}: {e}", path.display()))
        }
        _ => check_plot_name(path),
    }
}

fn short_duration(s: f64) -> String {
    if s < 1.0 {
        format!("{:.0}ms", s * 1e3)
    } else {
        format!("{s:.1}s")
    }
}

/// RMS over the whole cycles (rising zero crossing to rising zero crossing) of `samples`.
fn whole_cycle_rms(samples: &[f64]) -> Option<f64> {
    let rising: Vec<usize> = (1..samples.len())
        .filter(|&i| samples[i - 1] < 0.0 && samples[i] >= 0.0)
        .collect();
    if rising.len() < 2 {
        return None;
    }
    let (a, b) = (rising[0], rising[rising.len() - 1]);
    let sum: f64 = samples[a..b].iter().map(|v| v * v).sum();
    Some((sum / (b - a) as f64).sqrt())
}

/// An opened, scaled recording: its first samples read ahead for calibration.
struct Scaled {
    lead: Vec<f64>,
    /// The `--calibrate` voltage, if the scale was calibrated.
    calibrated_to: Option<f64>,
    /// The frequency of the first whole cycles, hertz.
    lead_frequency_hz: Option<f64>,
    rest: sagtrip::recording::Samples,
    scale: f64,
    how: String,
    rate: f64,
    description: String,
}

impl Scaled {
    /// Every sample in volts.
    fn volts(self) -> impl Iterator<Item = Result<f64, String>> {
        let scale = self.scale;
        self.lead.into_iter().map(move |v| Ok(v * scale)).chain(
            self.rest
                .map(move |s| s.map(|v| v * scale).map_err(|e| e.to_string())),
        )
    }
}

/// Refuses a recording whose first cycles' frequency differs from `expected_hz` by more
/// than 5%.
fn check_recording_frequency(
    measured_hz: Option<f64>,
    expected_hz: f64,
    what: &str,
) -> Result<(), String> {
    match measured_hz {
        Some(m) if (m / expected_hz - 1.0).abs() > 0.05 => Err(format!(
            "the recording's first cycles run at {m:.2} Hz, more than 5% from {what} \
             ({expected_hz} Hz)"
        )),
        _ => Ok(()),
    }
}

/// Opens a recording and works out its scale (given, calibrated on the first whole cycles
/// against `declared` volts, or 1 for a CSV column in volts).
fn open_scaled(input: &RecordingInput) -> Result<Scaled, String> {
    use sagtrip::recording::{open, CsvColumns};
    let columns = CsvColumns {
        time: input.time_column.clone(),
        voltage: input.voltage_column.clone(),
    };
    let mut samples = open(&input.recording, input.channel, &columns).map_err(|e| e.to_string())?;
    let rate = samples.sample_rate;
    let description = samples.description.clone();
    // Four cycles at 50 Hz (four whole ones at 60 Hz): enough to calibrate and to time the
    // supply, short enough to end before an event that a recording's lead-in precedes.
    let lead_count = (rate / 50.0 * 4.0).ceil() as usize + 2;
    let mut lead = Vec::with_capacity(lead_count);
    for s in samples.by_ref().take(lead_count) {
        lead.push(s.map_err(|e| e.to_string())?);
    }
    let (scale, how) = match (&input.volts_per_full_scale, &input.calibrate) {
        (Some(text), _) => {
            let v = parse_value(text, Quantity::Voltage)
                .map_err(|e| format!("--volts-per-full-scale: {e}"))?;
            (v, format!("{v} V per full scale (given)"))
        }
        (None, Some(text)) => {
            let target =
                parse_value(text, Quantity::Voltage).map_err(|e| format!("--calibrate: {e}"))?;
            let rms = whole_cycle_rms(&lead).filter(|r| *r > 0.0).ok_or_else(|| {
                format!(
                    "--calibrate: the recording's first {} samples hold no whole cycle to calibrate on",
                    lead.len()
                )
            })?;
            (
                target / rms,
                format!(
                    "{:.6} per unit (calibrated: the first whole cycles read {target} V rms)",
                    target / rms
                ),
            )
        }
        (None, None) if !samples.full_scale_fractions => {
            (1.0, "1 (the CSV column in volts)".to_string())
        }
        (None, None) => {
            return Err(
                "a WAV recording needs its scale: --volts-per-full-scale VOLTS or --calibrate 230V"
                    .into(),
            )
        }
    };
    let calibrated_to = match (&input.volts_per_full_scale, &input.calibrate) {
        (None, Some(text)) => parse_value(text, Quantity::Voltage).ok(),
        _ => None,
    };
    Ok(Scaled {
        lead_frequency_hz: sagtrip::detect::measured_frequency(&lead, rate),
        calibrated_to,
        lead,
        rest: samples,
        scale,
        how,
        rate,
        description,
    })
}

fn thresholds_of(input: &RecordingInput) -> sagtrip::detect::Thresholds {
    sagtrip::detect::Thresholds {
        dip_pct: input.dip,
        swell_pct: input.swell,
        interruption_pct: input.interruption,
        hysteresis_pct: input.hysteresis,
        phase_jump_deg: input.phase_jump,
    }
}

fn detect_command(args: &DetectArgs) -> Result<String, String> {
    use sagtrip::detect::Detector;
    let mut out = String::new();
    let scaled = open_scaled(&args.input)?;
    let measured_hz = scaled.lead_frequency_hz;
    let (declared, frequency, declared_how) = match &args.nominal {
        Some(text) => {
            let (v, f) = nominal_option(text)?;
            check_recording_frequency(measured_hz, f, "--nominal")?;
            (v, f, "given")
        }
        None => {
            let measured = measured_hz.ok_or(
                "the recording's first cycles have no two rising zero crossings to measure its \
                 frequency: give the declared supply with --nominal (e.g. 230V/50Hz)",
            )?;
            let f = if (measured - 50.0).abs() < (measured - 60.0).abs() {
                50.0
            } else {
                60.0
            };
            check_recording_frequency(Some(measured), f, "the nearest standard frequency")?;
            match scaled.calibrated_to {
                Some(v) => (v, f, "from --calibrate and the measured frequency"),
                None => {
                    let rms = whole_cycle_rms(&scaled.lead).unwrap_or(0.0) * scaled.scale;
                    (
                        sagtrip::detect::nearest_standard_voltage(rms),
                        f,
                        "the standard voltage nearest the first cycles, and the measured frequency",
                    )
                }
            }
        }
    };
    let (rate, how, description) = (scaled.rate, scaled.how.clone(), scaled.description.clone());
    let thresholds = thresholds_of(&args.input);
    let mut detector = Detector::new(rate, declared, frequency, thresholds.clone());
    for v in scaled.volts() {
        detector.push(v?);
    }
    let d = detector.finish();
    if let Some(path) = &args.plot {
        let plot = sagtrip::plot::RecordingPlot {
            title: format!("{}: events", args.input.recording.display()),
            detection: &d,
            declared_v: declared,
            thresholds: &thresholds,
            trips: Vec::new(),
            reconnections: Vec::new(),
            tripped: None,
        };
        write_plot(
            path,
            |p| sagtrip::plot::recording_png(&plot, p),
            || sagtrip::plot::recording_svg(&plot),
        )?;
    }
    if let Some(path) = &args.out {
        write_atomic(path, |w| {
            writeln!(
                w,
                "kind,start_s,duration_s,level_pct,ieee_1159,en_50160,phase_jump_deg,open_at_end"
            )?;
            for e in &d.events {
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
        })
        .map_err(|err| format!("cannot write {}: {err}", path.display()))?;
    }
    let frequencies = d.frequency_intervals();
    let (fmin, fmax) = frequencies
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &f| {
            (a.min(f), b.max(f))
        });
    let fmean = frequencies.iter().sum::<f64>() / frequencies.len().max(1) as f64;
    if args.json {
        let value = serde_json::json!({
            "recording": args.input.recording.display().to_string(),
            "format": description,
            "scale": how,
            "declared_rms_v": declared,
            "frequency_hz": frequency,
            "declared_from": declared_how,
            "duration_s": d.duration_s,
            "samples": d.samples,
            "measured_frequency_hz": { "mean": fmean, "min": fmin, "max": fmax },
            "events": d.events,
        });
        say!(out, "{}", pretty_json(&value));
        return Ok(out);
    }
    say!(
        out,
        "{}: {description}, {:.3} s",
        args.input.recording.display(),
        d.duration_s
    );
    say!(out, "scale: {how}");
    say!(
        out,
        "declared {declared} V / {frequency} Hz ({declared_how}); measured frequency {fmean:.3} Hz (10 s intervals from {fmin:.3} to {fmax:.3} Hz, cycles near events left out)"
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
    if let Some(path) = &args.out {
        say!(out, "\nevents written to {}", path.display());
    }
    Ok(out)
}

fn replay_command(args: &ReplayArgs) -> Result<String, String> {
    let mut out = String::new();
    let (circuit, name) = load_circuit(args.circuit.as_deref())?;
    let options = args.limits.options(args.nominal.as_deref())?;
    let started = Instant::now();
    let settled =
        sagtrip::scenario::settle(&circuit, &options).map_err(|e| format!("{name}: {e}"))?;
    let scaled = open_scaled(&args.input)?;
    check_recording_frequency(
        scaled.lead_frequency_hz,
        settled.frequency_hz,
        "the protector's supply",
    )?;
    let (rate, how, description) = (scaled.rate, scaled.how.clone(), scaled.description.clone());
    let probes = args.trace.as_ref().map(|_| {
        let mut p = vec![Probe::Voltage {
            node: circuit.node("line").unwrap_or(1),
        }];
        p.extend(sagtrip::plot::plot_probes(&circuit));
        p.dedup();
        p
    });
    let thresholds = thresholds_of(&args.input);
    // A progress bar on the terminal (indicatif draws nothing when stderr is not one), in
    // seconds of recording; its length is known for WAV files, whose header gives it.
    let total_s = scaled.rest.expected_len.map(|n| n as f64 / rate);
    let bar = match total_s {
        Some(total) if !args.json => indicatif::ProgressBar::new(total.ceil() as u64),
        Some(_) => indicatif::ProgressBar::hidden(),
        None if !args.json => indicatif::ProgressBar::no_length(),
        None => indicatif::ProgressBar::hidden(),
    };
    bar.set_style(
        indicatif::ProgressStyle::with_template(if total_s.is_some() {
            "{bar:40} {pos}/{len} s of recording, {elapsed} elapsed, about {eta} left"
        } else {
            "{spinner} {pos} s of recording, {elapsed} elapsed"
        })
        .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar()),
    );
    let replay = settled
        .replay_with_progress(scaled.volts(), rate, thresholds.clone(), probes, &mut |s| {
            bar.set_position(s as u64)
        })
        .map_err(|e| format!("{}: {e}", args.input.recording.display()));
    bar.finish_and_clear();
    let replay = replay?;
    if let Some(path) = &args.plot {
        let plot = sagtrip::plot::RecordingPlot {
            title: format!(
                "{} through {}",
                args.input.recording.display(),
                circuit.title
            ),
            detection: &replay.detection,
            declared_v: settled.rms,
            thresholds: &thresholds,
            trips: replay.trips.iter().map(|t| t.time_s).collect(),
            reconnections: replay
                .trips
                .iter()
                .filter_map(|t| t.reconnected_s)
                .collect(),
            tripped: Some(replay.responses.iter().map(|r| r.tripped).collect()),
        };
        write_plot(
            path,
            |p| sagtrip::plot::recording_png(&plot, p),
            || sagtrip::plot::recording_svg(&plot),
        )?;
    }
    let wall = started.elapsed().as_secs_f64();
    if let (Some(path), Some(trace)) = (&args.trace, &replay.trace) {
        write_atomic(path, |w| trace.write_csv(&circuit, w))
            .map_err(|e| format!("cannot write trace {}: {e}", path.display()))?;
    }
    let tripped = replay.responses.iter().filter(|r| r.tripped).count();
    if args.json {
        let value = serde_json::json!({
            "circuit": name,
            "recording": args.input.recording.display().to_string(),
            "format": description,
            "scale": how,
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
            "wall_time_s": wall,
        });
        say!(out, "{}", pretty_json(&value));
        return Ok(out);
    }
    say!(out, "{name}: {}", circuit.title);
    say!(
        out,
        "{}: {description}, {:.3} s; scale {how}; joined at {:.4} s",
        args.input.recording.display(),
        replay.duration_s,
        replay.joined_at_s
    );
    if replay.responses.is_empty() {
        say!(out, "\nno dips, swells or interruptions detected");
    } else {
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
        for r in &replay.responses {
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
    for t in &replay.nuisance_trips {
        say!(
            out,
            "NUISANCE TRIP at {:.4} s with no detected event",
            t.time_s
        );
    }
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
        "(trip and reconnection times count from the event's detected start and end)\n{:.2} s wall, {:.0}x real time",
        wall,
        replay.duration_s / wall.max(1e-9)
    );
    Ok(out)
}

fn thresholds_command(args: &ThresholdsArgs) -> Result<String, String> {
    use sagtrip::thresholds::{find, SideThresholds, ThresholdOptions};
    let mut out = String::new();
    let (circuit, name) = load_circuit(args.circuit.as_deref())?;
    let options = args.limits.options(args.nominal.as_deref())?;
    if let Some(path) = &args.plot {
        check_plot_name(path)?;
    }
    let started = Instant::now();
    let settled =
        sagtrip::scenario::settle(&circuit, &options).map_err(|e| format!("{name}: {e}"))?;
    let frequency = settled.frequency_hz;
    let resolution_v = parse_value(&args.resolution, Quantity::Voltage)
        .map_err(|e| format!("--resolution: {e}"))?;
    if !resolution_v.is_finite() || resolution_v <= 0.0 {
        return Err(format!(
            "--resolution {}: must be above 0 V",
            args.resolution
        ));
    }
    let threshold_options = ThresholdOptions {
        resolution_v,
        hold_s: duration_option(&args.hold, "hold", frequency)?,
        ramp_s: duration_option(&args.ramp, "ramp", frequency)?,
        ..ThresholdOptions::default()
    };
    if threshold_options.hold_s <= 0.0 || threshold_options.ramp_s <= 0.0 {
        return Err("--hold and --ramp must be longer than 0".into());
    }
    let result =
        find(&settled, &circuit, &threshold_options).map_err(|e| format!("{name}: {e}"))?;
    if let Some(path) = &args.plot {
        let title = format!("Static thresholds: {}", circuit.title);
        write_plot(
            path,
            |p| sagtrip::plot::thresholds_png(&result, &title, p),
            || sagtrip::plot::thresholds_svg(&result, &title),
        )?;
    }
    let wall = started.elapsed().as_secs_f64();
    if args.json {
        let mut value = serde_json::to_value(&result).unwrap_or_default();
        value["circuit"] = serde_json::json!(name);
        value["wall_time_s"] = serde_json::json!(wall);
        say!(out, "{}", pretty_json(&value));
        return Ok(out);
    }
    say!(out, "{name}: {}", circuit.title);
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
    let label = |s: &SideThresholds| match s.side {
        sagtrip::thresholds::Side::Under => "under",
        sagtrip::thresholds::Side::Over => "over",
    };
    for s in [&result.under, &result.over] {
        let v = |t: Option<sagtrip::thresholds::Threshold>| {
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
    let ramps: Vec<_> = [&result.under, &result.over]
        .into_iter()
        .filter_map(|s| s.ramp.as_ref().map(|r| (label(s), r)))
        .collect();
    if !ramps.is_empty() {
        say!(
            out,
            "\nslow ramps: from nominal over {} s to 5% beyond the trip, held {} s, back over {} s",
            threshold_options.ramp_s,
            threshold_options.hold_s,
            threshold_options.ramp_s
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
    say!(out, "\n{wall:.1} s wall");
    Ok(out)
}

/// The table's progress on one terminal bar, restarted at each stage.
struct Bar(indicatif::ProgressBar);

impl sagtrip::table::Progress for Bar {
    fn stage(&self, name: &str, runs: usize) {
        self.0.set_message(if name.is_empty() {
            String::new()
        } else {
            format!("{name} ")
        });
        self.0.set_length(runs as u64);
        self.0.set_position(0);
    }

    fn done(&self) {
        self.0.inc(1);
    }
}

fn table_command(args: &TableArgs) -> Result<String, String> {
    use sagtrip::table::{csv, default_plan, markdown, parse_plan, Cases, Progress};
    let mut out = String::new();
    let (circuit, name, text_of_circuit) = load_circuit_and_text(args.circuit.as_deref())?;
    let options = args.limits.options(args.nominal.as_deref())?;
    // The plan first: a mistake in it is reported before any simulation.
    let frequency_hint = options
        .nominal
        .map(|(_, f)| f)
        .or_else(|| {
            sagtrip::scenario::find_mains(&circuit, None)
                .ok()
                .map(|m| m.frequency_hz)
        })
        .unwrap_or(50.0);
    let mut plan = match &args.plan {
        Some(path) => {
            let text = std::fs::read_to_string(path)
                .map_err(|e| format!("cannot read plan {}: {e}", path.display()))?;
            parse_plan(&text, &path.display().to_string(), frequency_hint)
                .map_err(|e| e.to_string())?
        }
        None => default_plan(args.class, frequency_hint)?,
    };
    if let Some(text) = &args.phases {
        plan.phases = text
            .split(',')
            .map(|p| {
                p.trim()
                    .trim_end_matches("deg")
                    .parse::<f64>()
                    .ok()
                    .filter(|x| x.is_finite())
                    .ok_or_else(|| format!("--phases {text}: expected degrees, e.g. 0,90,180,270"))
            })
            .collect::<Result<_, _>>()?;
    }
    if args.no_thresholds {
        plan.thresholds = false;
    }
    for path in [&args.csv, &args.markdown, &args.html]
        .into_iter()
        .flatten()
    {
        if path.as_os_str().is_empty() {
            return Err("an output file name is empty".into());
        }
    }
    let started = Instant::now();
    let cases = match (args.corners, args.monte_carlo, args.screen) {
        (true, Some(_), _) => return Err("give --corners or --monte-carlo, not both".into()),
        (false, _, Some(_)) => return Err("--screen goes with --corners".into()),
        (true, None, screen) => Cases::Corners { screen },
        (false, Some(count), None) => Cases::MonteCarlo {
            count,
            seed: args.seed,
        },
        (false, None, None) => Cases::Nominal,
    };
    let bar = if args.quiet || args.json {
        indicatif::ProgressBar::hidden()
    } else {
        indicatif::ProgressBar::new(0)
    };
    bar.set_style(
        indicatif::ProgressStyle::with_template(
            "{msg}{bar:40} {pos}/{len} runs, {elapsed} elapsed, about {eta} left",
        )
        .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar()),
    );
    let progress = Bar(bar);
    let source = sagtrip::table::Source {
        text: &text_of_circuit,
        path: &name,
        circuit: &circuit,
    };
    let (table, settled) = sagtrip::table::build(source, &options, &plan, cases, &progress)?;
    let bar = &progress.0;
    let text = markdown(&table);
    if let Some(path) = &args.csv {
        write_atomic(path, |w| w.write_all(csv(&table).as_bytes()))
            .map_err(|e| format!("cannot write {}: {e}", path.display()))?;
    }
    if let Some(path) = &args.markdown {
        write_atomic(path, |w| w.write_all(text.as_bytes()))
            .map_err(|e| format!("cannot write {}: {e}", path.display()))?;
    }
    if let Some(path) = &args.html {
        // The report's trip map: a coarse grid (the sweep command refines it further).
        let map_grid = sagtrip::sweep::Grid {
            levels_pct: (0..10)
                .map(|k| f64::from(k) * 10.0)
                .chain([110.0, 120.0, 130.0, 150.0])
                .collect(),
            durations_s: sagtrip::sweep::log_durations(0.5 / settled.frequency_hz, 10.0, 10),
            phases_deg: vec![0.0, 90.0],
        };
        progress.stage("trip map", map_grid.points().len());
        let points =
            sagtrip::sweep::run_grid(&settled, &circuit, &map_grid, DEFAULT_EDGE_S, &|| {
                bar.inc(1)
            });
        let map = sagtrip::sweep::cells(&points);
        let map_svg = sagtrip::plot::map_svg(&sagtrip::plot::MapData {
            title: format!("Trip map: {}", circuit.title),
            cells: &map,
            durations_s: &map_grid.durations_s,
            levels_pct: &map_grid.levels_pct,
            boundaries: Vec::new(),
            duration_boundary: &table.longest_ride_through,
            frequency_hz: settled.frequency_hz,
        })?;
        let mut figures: Vec<(String, String)> = vec![(
            "Trip map: worst case over 0 and 90 degrees for each level and duration, with the \
             reference ride-through curves (sagtrip sweep refines the boundary)"
                .to_string(),
            map_svg,
        )];
        if let Some(t) = &table.thresholds {
            figures.push((
                "Static thresholds: the trip voltages from normal supply and the reset \
                 voltages after a trip"
                    .to_string(),
                sagtrip::plot::thresholds_svg(t, &format!("Static thresholds: {}", circuit.title))?,
            ));
        }
        let refs: Vec<(&str, &str)> = figures
            .iter()
            .map(|(c, s)| (c.as_str(), s.as_str()))
            .collect();
        let page = sagtrip::table::html(&table, &refs);
        write_atomic(path, |w| w.write_all(page.as_bytes()))
            .map_err(|e| format!("cannot write {}: {e}", path.display()))?;
    }
    bar.finish_and_clear();
    let wall = started.elapsed().as_secs_f64();
    if args.json {
        let mut value = serde_json::to_value(&table).unwrap_or_default();
        value["wall_time_s"] = serde_json::json!(wall);
        say!(out, "{}", pretty_json(&value));
        return Ok(out);
    }
    out.push_str(&text);
    say!(out, "\n({name}; {wall:.1} s wall)");
    Ok(out)
}

/// `v` rounded to 9 significant digits, printed in its shortest form (no binary noise).
fn significant(v: f64) -> f64 {
    format!("{v:.8e}").parse().unwrap_or(v)
}

/// A JSON value as indented text.
fn pretty_json(value: &serde_json::Value) -> String {
    serde_json::to_string_pretty(value).unwrap_or_default()
}

/// Refuses a plot file name that is neither `.svg` nor `.png` (before any work is done).
fn check_plot_name(path: &Path) -> Result<(), String> {
    match path.extension().and_then(|e| e.to_str()) {
        Some("svg" | "png") => Ok(()),
        _ => Err(format!(
            "--plot {}: the file name must end in .svg or .png",
            path.display()
        )),
    }
}
