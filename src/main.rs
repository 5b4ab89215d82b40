//! The `sagtrip` command line: parses arguments, dispatches to the command modules under
//! `src/cli/` and turns errors into messages and exit codes. Every computation lives in the
//! library.

mod cli;

use std::io::Write as _;
use std::process::ExitCode;

use clap::{Parser, Subcommand};

use cli::detect::DetectArgs;
use cli::merge::MergeArgs;
use cli::replay::ReplayArgs;
use cli::run::RunArgs;
use cli::sweep::SweepArgs;
use cli::synth::SynthArgs;
use cli::table::TableArgs;
use cli::thresholds::ThresholdsArgs;
use cli::SAFETY;

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
    Check(cli::CircuitArgs),
    /// Simulate a circuit: a power-up, or with --event a supply disturbance and the
    /// protector's measured response.
    Run(Box<RunArgs>),
    /// List the built-in IEC 61000-4-11 tests (presets) usable with --event.
    Presets,
    /// Write one of the bundled circuits (the reference guard by default) as a commented
    /// starting file; --list shows them.
    New(cli::new::NewArgs),
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

fn main() -> ExitCode {
    let cli = Cli::parse();
    let result = match cli.command {
        Command::Check(args) => cli::check::check(&args),
        Command::Run(args) => {
            if args.event.is_some() || args.event_file.is_some() {
                cli::run::run_event_command(&args)
            } else {
                cli::run::run(&args)
            }
        }
        Command::Presets => Ok(cli::presets::presets()),
        Command::New(args) => cli::new::new(&args),
        Command::Synth(args) => cli::synth::synth(&args),
        Command::Sweep(args) => cli::sweep::sweep(&args),
        Command::Merge(args) => cli::merge::merge(&args),
        Command::Detect(args) => cli::detect::detect_command(&args),
        Command::Replay(args) => cli::replay::replay_command(&args),
        Command::Thresholds(args) => cli::thresholds::thresholds_command(&args),
        Command::Table(args) => cli::table::table_command(&args),
    };
    match result {
        Ok(text) => {
            // A closed pipe (e.g. `| head`) is not an error worth a panic.
            let _ = std::io::stdout().write_all(text.as_bytes());
            // Every report with numbers carries the caution: after the text, or on the
            // error stream where the output is JSON (which must stay valid JSON). A report
            // that already holds it (the table's Markdown) is not given it twice.
            let json = text.trim_start().starts_with(['{', '[']);
            if !text.trim().is_empty() && !text.contains(sagtrip::CAUTION) {
                if json {
                    let _ = writeln!(std::io::stderr(), "{}", sagtrip::CAUTION);
                } else {
                    let _ = writeln!(std::io::stdout(), "\n{}", sagtrip::CAUTION);
                }
            }
            ExitCode::SUCCESS
        }
        Err(failure) => {
            // A closed error stream is no reason to panic: the exit code still tells.
            let message = clipped(failure.message().trim_end());
            let _ = writeln!(std::io::stderr(), "error: {message}");
            ExitCode::from(failure.code())
        }
    }
}

/// A message with every line cut to at most 400 characters: an input with an enormous line
/// must not flood the terminal with its echo.
fn clipped(message: &str) -> String {
    const MAX: usize = 400;
    message
        .lines()
        .map(|line| match line.char_indices().nth(MAX) {
            Some((cut, _)) => format!("{}...", &line[..cut]),
            None => line.to_string(),
        })
        .collect::<Vec<_>>()
        .join("\n")
}
