//! `sagtrip table`: the datasheet timing table.

use super::*;

#[derive(Args)]
pub(crate) struct TableArgs {
    #[command(flatten)]
    circuit: CircuitArgs,
    /// Nominal supply, e.g. 230V/50Hz (default: the circuit's mains source).
    #[arg(long, allow_hyphen_values = true)]
    nominal: Option<String>,
    /// IEC 61000-4-11 test class of the default plan (2 or 3).
    #[arg(long, default_value_t = 3)]
    class: u8,
    /// A test plan file (TOML) instead of the default plan; see docs/table.md.
    #[arg(long)]
    plan: Option<PathBuf>,
    /// Start phase angles in degrees, e.g. 0,90,180,270 (default: the plan's).
    #[arg(long, allow_hyphen_values = true)]
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
    /// Durations of the HTML report's trip map (log-spaced from half a cycle to 10 s);
    /// 0 leaves the map out.
    #[arg(
        long,
        value_name = "N",
        default_value_t = 10,
        allow_hyphen_values = true
    )]
    map_durations: usize,
    /// Print the table as JSON instead of Markdown.
    #[arg(long)]
    json: bool,
    /// Also run every corner of the circuit's toleranced values; with more than 8 values,
    /// the 8 with the largest effect found by screening (see --screen).
    #[arg(long)]
    corners: bool,
    /// With --corners: screen the values first (each alone at its limits) and vary only the
    /// K with the largest effect in the corners, the others as written (K from 1 to 8).
    #[arg(long, value_name = "K", allow_hyphen_values = true)]
    screen: Option<usize>,
    /// Also run this many Monte Carlo samples of the toleranced values.
    #[arg(long, value_name = "N", allow_hyphen_values = true)]
    monte_carlo: Option<usize>,
    /// Seed of the Monte Carlo samples (the same seed gives the same table).
    #[arg(long, default_value_t = 1, allow_hyphen_values = true)]
    seed: u64,
    /// No progress bar.
    #[arg(long)]
    quiet: bool,
    #[command(flatten)]
    limits: LimitArgs,
}

/// The table's progress on one terminal bar, restarted at each stage.
pub(crate) struct Bar(indicatif::ProgressBar);

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

pub(crate) fn table_command(args: &TableArgs) -> Outcome {
    use sagtrip::table::{csv, markdown};
    let mut out = String::new();
    refuse_overwriting_inputs(
        &[
            ("--csv", args.csv.as_deref()),
            ("--markdown", args.markdown.as_deref()),
            ("--html", args.html.as_deref()),
        ],
        &[args.circuit.path(), args.plan.as_deref()],
    )?;
    let (circuit, name, text_of_circuit) = args.circuit.load_with_text()?;
    let options = args.limits.options(args.nominal.as_deref())?;
    // The plan first: a mistake in it is reported before any simulation.
    let plan = plan_of(args, &options, &circuit)?;
    for path in [&args.csv, &args.markdown, &args.html]
        .into_iter()
        .flatten()
    {
        if path.as_os_str().is_empty() {
            return Err("an output file name is empty".into());
        }
    }
    let started = Instant::now();
    let cases = cases_of(args)?;
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
    let (table, settled) = sagtrip::table::build(source, &options, &plan, cases, &progress)
        .map_err(|e| table_failure(&name, e))?;
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
        let map = sagtrip::table::ReportMap {
            durations: args.map_durations,
            ..Default::default()
        };
        let page = sagtrip::table::html_report(&table, &settled, &circuit, &map, &progress)?;
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

/// The plan: the file's or the class's default, with the options' phases and thresholds.
fn plan_of(
    args: &TableArgs,
    options: &EventOptions,
    circuit: &Circuit,
) -> Result<sagtrip::table::Plan, Failure> {
    use sagtrip::table::{default_plan, parse_plan};
    let frequency_hint = options
        .nominal
        .map(|n| n.frequency_hz)
        .or_else(|| {
            sagtrip::scenario::find_mains(circuit, None)
                .ok()
                .map(|m| m.frequency_hz)
        })
        .unwrap_or(50.0);
    let mut plan = match &args.plan {
        Some(path) => {
            let text = read_text(path, "plan")?;
            parse_plan(&text, &path.display().to_string(), frequency_hint)
                .map_err(|e| e.to_string())?
        }
        None => default_plan(args.class, frequency_hint).map_err(|e| format!("--class: {e}"))?,
    };
    if let Some(text) = &args.phases {
        plan.phases = phase_list(text, "phases")?;
    }
    if args.no_thresholds {
        plan.thresholds = false;
    }
    Ok(plan)
}

/// The tolerance cases the options ask for.
fn cases_of(args: &TableArgs) -> Result<sagtrip::table::Cases, Failure> {
    use sagtrip::table::Cases;
    Ok(match (args.corners, args.monte_carlo, args.screen) {
        (true, Some(_), _) => return Err("give --corners or --monte-carlo, not both".into()),
        (false, _, Some(_)) => return Err("--screen goes with --corners".into()),
        (true, None, screen) => Cases::Corners { screen },
        (false, Some(count), None) => Cases::MonteCarlo {
            count,
            seed: args.seed,
        },
        (false, None, None) => Cases::Nominal,
    })
}

/// A table's failure with the option or file it concerns, and its exit code.
fn table_failure(name: &str, e: sagtrip::table::TableError) -> Failure {
    use sagtrip::table::TableError;
    match e {
        TableError::NoTolerances { kind, .. } => Failure::Input(format!(
            "{}: {e}",
            match kind {
                sagtrip::table::CaseKind::Corners => "--corners",
                sagtrip::table::CaseKind::MonteCarlo => "--monte-carlo",
            }
        )),
        TableError::ScreenOutOfRange { keep } => Failure::Input(format!("--screen {keep}: {e}")),
        TableError::TooManyCorners(_) => Failure::Input(format!(
            "--corners: {e} (--screen K keeps the K that matter most)"
        )),
        TableError::Settle(path, e) => scenario_failure(&path, e),
        TableError::CaseFile { .. } => Failure::Input(format!("{name}: {e}")),
        e => Failure::Run(e.to_string()),
    }
}
