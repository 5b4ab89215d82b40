//! The table as Markdown, CSV and HTML, and the HTML report with its figures.

use super::*;

/// The longest ride-through as rows: level, longest ridden through, shortest trip.
fn ride_through_rows(table: &Table) -> Vec<[String; 3]> {
    use crate::sweep::DurationSearch;
    use crate::units::format_duration;
    table
        .longest_ride_through
        .iter()
        .map(|b| {
            let (ride, trip) = match (b.status, b.longest_ride_through_s, b.shortest_trip_s) {
                (DurationSearch::Found, Some(r), Some(t)) => {
                    (format_duration(r), format_duration(t))
                }
                (DurationSearch::RidesThroughAll, Some(r), _) => (
                    format!("at least {}", format_duration(r)),
                    "none searched".into(),
                ),
                (_, _, Some(t)) => ("none".into(), format!("{} or less", format_duration(t))),
                _ => ("-".into(), "-".into()),
            };
            [format!("{}%", b.level_pct), ride, trip]
        })
        .collect()
}

/// What the longest ride-through section shows.
fn ride_through_text(table: &Table) -> String {
    format!(
        "The longest dip ridden through at every start phase, at each residual level (nominal circuit): found by bisection in duration from half a cycle to {}, to 1% of the duration or 0.5 ms, whichever is larger. The value given was simulated and rode through; the next column is the shortest duration found to trip.",
        crate::units::format_duration(table.ride_through_longest_s)
    )
}

/// A timing spread as `min / typical / max` in ms (0.1 ms), or `-`.
fn spread_cell(s: Option<Spread>) -> String {
    match s {
        Some(s) => format!("{:.1} / {:.1} / {:.1}", s.min, s.typical, s.max),
        None => "-".to_string(),
    }
}

/// The restore latency cell: the spread over the runs that reconnected, and how many runs
/// had not reconnected within the restore limit (never a latency that was not seen).
fn restore_cell(r: &Row) -> String {
    let limit = format!("not reconnected within {} s", r.restore_limit_s);
    match (r.not_reconnected_runs, r.restore_latency_ms) {
        (0, s) => spread_cell(s),
        (_, None) => limit,
        (n, s) => format!("{}; {limit} in {n} runs", spread_cell(s)),
    }
}

/// The four timing cells of a row: trip, restore, release, operate.
fn timing_cells(r: &Row) -> [String; 4] {
    [
        spread_cell(r.trip_latency_ms),
        restore_cell(r),
        spread_cell(r.release_time_ms),
        spread_cell(r.operate_time_ms),
    ]
}

/// The static thresholds as rows: side, trip, reset, hysteresis, what the slow ramp showed.
fn threshold_rows(t: &StaticThresholds) -> Vec<[String; 5]> {
    let volts = |x: Option<crate::thresholds::Threshold>| {
        x.map_or("-".to_string(), |x| {
            format!("{:.1} V ({:.1}%)", x.volts, x.percent)
        })
    };
    [&t.under, &t.over]
        .into_iter()
        .map(|s| {
            let ramp = s
                .ramp
                .as_ref()
                .map_or("-".to_string(), crate::thresholds::Ramp::verdict);
            [
                match s.side {
                    crate::thresholds::Side::Under => "under-voltage",
                    crate::thresholds::Side::Over => "over-voltage",
                }
                .to_string(),
                volts(s.trip),
                volts(s.reset),
                s.hysteresis_v
                    .map_or("-".to_string(), |h| format!("{h:.1} V")),
                ramp,
            ]
        })
        .collect()
}

/// The sentence under the heading: plan, supply, phases, cases, runs.
fn summary_sentence(table: &Table) -> String {
    let phases: Vec<String> = table.phases_deg.iter().map(|p| format!("{p}°")).collect();
    let (cases, over) = if table.tolerance_cases.is_empty() {
        (String::new(), "the phases")
    } else {
        (
            format!(" and {}", table.tolerance_cases),
            "the phases and tolerance cases",
        )
    };
    format!(
        "{} on a {:.0} V {:.0} Hz supply; each test at {} start phase{cases}; {} simulated \
         runs. Times in ms as min / typical / max over {over} (typical: the median). \
         Power-up limit {}, restore limit {} after each event.",
        table.plan,
        table.nominal_rms_v,
        table.frequency_hz,
        phases.join(", "),
        table.runs,
        crate::units::format_duration(table.power_up_limit_s),
        crate::units::format_duration(table.restore_limit_s)
    )
}

/// The threshold spread as rows: threshold, min, typical, max (volts).
fn spread_rows(t: &ThresholdSpread) -> Vec<[String; 4]> {
    [
        ("under-voltage trip", t.under_trip_v),
        ("under-voltage reset", t.under_reset_v),
        ("over-voltage trip", t.over_trip_v),
        ("over-voltage reset", t.over_reset_v),
    ]
    .into_iter()
    .map(|(name, s)| match s {
        Some(s) => [
            name.to_string(),
            format!("{:.1} V", s.min),
            format!("{:.1} V", s.typical),
            format!("{:.1} V", s.max),
        ],
        None => [name.to_string(), "-".into(), "-".into(), "-".into()],
    })
    .collect()
}

/// The table as Markdown: readable in a terminal, pasteable into a datasheet.
pub fn markdown(table: &Table) -> String {
    let mut out = String::new();
    let _ = writeln!(out, "# {}\n", table.circuit);
    let _ = writeln!(out, "{}\n", summary_sentence(table));
    let _ = writeln!(
        out,
        "| test | source | event | outcome | trip latency | restore latency | release time | operate time |"
    );
    let _ = writeln!(out, "|---|---|---|---|---|---|---|---|");
    for r in &table.rows {
        let [trip, restore, release, operate] = timing_cells(r);
        let _ = writeln!(
            out,
            "| {} | {} | `{}` | {} | {trip} | {restore} | {release} | {operate} |",
            r.name, r.source, r.event, r.outcome
        );
    }
    if let Some(t) = &table.thresholds {
        let _ = writeln!(
            out,
            "\n## Static thresholds\n\nEach level held {} s, found by bisection to {} V.\n",
            t.hold_s, t.resolution_v
        );
        let _ = writeln!(out, "| side | trip | reset | hysteresis | slow ramp |");
        let _ = writeln!(out, "|---|---|---|---|---|");
        for [side, trip, reset, hysteresis, ramp] in threshold_rows(t) {
            let _ = writeln!(out, "| {side} | {trip} | {reset} | {hysteresis} | {ramp} |");
        }
        for s in [&t.under, &t.over] {
            if let Some(note) = &s.note {
                let _ = writeln!(out, "\n{note}");
            }
        }
    }
    if !table.longest_ride_through.is_empty() {
        let _ = writeln!(
            out,
            "\n## Longest ride-through\n\n{}\n",
            ride_through_text(table)
        );
        let _ = writeln!(out, "| residual | longest ridden through | shortest trip |");
        let _ = writeln!(out, "|---|---|---|");
        for [level, ride, trip] in ride_through_rows(table) {
            let _ = writeln!(out, "| {level} | {ride} | {trip} |");
        }
    }
    if let Some(spread) = &table.threshold_spread {
        let _ = writeln!(
            out,
            "\nOver the {} tolerance cases (the table above is the nominal case):\n",
            spread.cases
        );
        let _ = writeln!(out, "| threshold | min | typical | max |");
        let _ = writeln!(out, "|---|---|---|---|");
        for [name, lo, typ, hi] in spread_rows(spread) {
            let _ = writeln!(out, "| {name} | {lo} | {typ} | {hi} |");
        }
    }
    if !table.screening.effects.is_empty() {
        let _ = writeln!(out, "\n## Tolerance screening\n\n{SCREENING_TEXT}\n");
        let _ = writeln!(out, "| value | share of a spread | change | in | corners |");
        let _ = writeln!(out, "|---|---|---|---|---|");
        for [field, percent, change, quantity, kept] in screening_rows(&table.screening.effects) {
            let _ = writeln!(
                out,
                "| `{field}` | {percent} | {change} | {quantity} | {kept} |"
            );
        }
        if let Some(text) = allowance_text(&table.screening) {
            let _ = writeln!(out, "\n{text}");
        }
    }
    for note in &table.notes {
        let _ = writeln!(out, "\nNote: {note}");
    }
    let _ = writeln!(out, "\n{}", crate::CAUTION);
    out
}

/// What the screening table shows.
const SCREENING_TEXT: &str = "Each value alone at its lower and at its upper limit, the others \
     as written, at the first start phase. For every reported figure (each test's typical \
     trip and restore latency, each static threshold) the changes of all values add up to \
     an estimate of the figure's spread over the corners; a value's share of a spread is its \
     change as a percentage of that sum, so thresholds in volts and latencies in \
     milliseconds rank on one scale. Each value ranks by its largest share (100% where one \
     limit trips and the other does not); figures whose changes add up to less than 0.5 ms \
     or twice the threshold resolution do not rank. The corners vary the values kept and \
     leave the others as written.";

/// The unit of a screening quantity, from its name.
fn quantity_unit(name: &str) -> &'static str {
    if name.contains("latency") {
        "ms"
    } else {
        "V"
    }
}

/// What the values held as written could add to the spreads, as a sentence.
fn allowance_text(screening: &Screening) -> Option<String> {
    if screening.allowance.is_empty() {
        return None;
    }
    let items: Vec<String> = screening
        .allowance
        .iter()
        .map(|(name, a)| {
            if a.is_finite() {
                format!("{name} {a:.2} {}", quantity_unit(name))
            } else {
                format!("{name} (a held value decides whether it trips)")
            }
        })
        .collect();
    Some(format!(
        "The values held as written could widen each side of these spreads by up to (half \
         the sum of their changes, first order): {}.",
        items.join("; ")
    ))
}

/// The screening as rows: field, share, change, quantity, kept.
fn screening_rows(effects: &[Effect]) -> Vec<[String; 5]> {
    effects
        .iter()
        .map(|e| {
            [
                e.field.clone(),
                format!("{:.1}%", e.percent),
                if e.quantity.is_empty() {
                    "-".into()
                } else if e.change.is_finite() {
                    format!("{:.2} {}", e.change, quantity_unit(&e.quantity))
                } else {
                    "trips at one limit only".into()
                },
                if e.quantity.is_empty() {
                    "-".into()
                } else {
                    e.quantity.clone()
                },
                if e.kept { "varied" } else { "as written" }.into(),
            ]
        })
        .collect()
}

/// The table as CSV: one line per test, the spreads in three columns each.
pub fn csv(table: &Table) -> String {
    let mut out = String::from(
        "test,source,event,outcome,trip_min_ms,trip_typical_ms,trip_max_ms,\
         restore_min_ms,restore_typical_ms,restore_max_ms,release_min_ms,release_typical_ms,\
         release_max_ms,operate_min_ms,operate_typical_ms,operate_max_ms,min_rail_v,\
         not_reconnected_runs,restore_limit_s\n",
    );
    let quote = |s: &str| {
        if s.contains([',', '"', '\n']) {
            format!("\"{}\"", s.replace('"', "\"\""))
        } else {
            s.to_string()
        }
    };
    for r in &table.rows {
        let mut cells = vec![
            quote(&r.name),
            quote(&r.source),
            quote(&r.event),
            quote(&r.outcome),
        ];
        for s in [
            r.trip_latency_ms,
            r.restore_latency_ms,
            r.release_time_ms,
            r.operate_time_ms,
        ] {
            let [a, b, c] = match s {
                Some(s) => [
                    format!("{:.3}", s.min),
                    format!("{:.3}", s.typical),
                    format!("{:.3}", s.max),
                ],
                None => [String::new(), String::new(), String::new()],
            };
            cells.extend([a, b, c]);
        }
        cells.push(r.min_rail_v.map_or(String::new(), |v| format!("{v:.3}")));
        cells.push(r.not_reconnected_runs.to_string());
        cells.push(r.restore_limit_s.to_string());
        let _ = writeln!(out, "{}", cells.join(","));
    }
    out
}

fn escape(text: &str) -> String {
    text.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
}

/// The table as one self-contained HTML page (no network, no scripts): the heading, the
/// safety caution, the table, the static thresholds and the given SVG figures inline.
pub fn html(table: &Table, figures: &[(&str, &str)]) -> String {
    let mut out = String::new();
    let _ = write!(
        out,
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n\
         <title>{title}: timing table</title>\n<style>\n\
         body {{ font-family: sans-serif; margin: 2em auto; max-width: 1200px; color: #222; }}\n\
         table {{ border-collapse: collapse; margin: 1em 0; }}\n\
         th, td {{ border: 1px solid #bbb; padding: 0.3em 0.6em; text-align: left; }}\n\
         td.num {{ text-align: right; font-variant-numeric: tabular-nums; }}\n\
         th {{ background: #eee; }}\n\
         .caution {{ border-left: 4px solid #c00; padding: 0.5em 1em; background: #fff4f4; }}\n\
         figure {{ margin: 1.5em 0; }} svg {{ max-width: 100%; height: auto; }}\n\
         </style>\n</head>\n<body>\n<h1>{title}</h1>\n",
        title = escape(&table.circuit)
    );
    let _ = writeln!(out, "<p>{}</p>", escape(&summary_sentence(table)));
    let _ = writeln!(
        out,
        "<p class=\"caution\"><strong>Safety.</strong> Mains voltage can kill. These are \
         simulated results of a circuit model: they do not replace testing a real unit, the \
         electrical codes that apply, or the judgement of a licensed practitioner.</p>"
    );
    let _ = writeln!(
        out,
        "<table>\n<tr><th>test</th><th>source</th><th>event</th><th>outcome</th>\
         <th>trip latency</th><th>restore latency</th><th>release time</th>\
         <th>operate time</th></tr>"
    );
    for r in &table.rows {
        let [trip, restore, release, operate] = timing_cells(r);
        let _ = writeln!(
            out,
            "<tr><td>{}</td><td>{}</td><td><code>{}</code></td><td>{}</td>\
             <td class=\"num\">{trip}</td><td class=\"num\">{restore}</td>\
             <td class=\"num\">{release}</td><td class=\"num\">{operate}</td></tr>",
            escape(&r.name),
            escape(&r.source),
            escape(&r.event),
            escape(&r.outcome)
        );
    }
    let _ = writeln!(out, "</table>");
    html_thresholds(&mut out, table);
    html_ride_through(&mut out, table);
    html_spread(&mut out, table);
    html_screening(&mut out, table);
    for note in &table.notes {
        let _ = writeln!(out, "<p><strong>Note:</strong> {}</p>", escape(note));
    }
    for (caption, svg) in figures {
        // An SVG document's XML declaration is not allowed inside HTML.
        let body = svg
            .trim_start()
            .strip_prefix("<?xml")
            .and_then(|rest| rest.split_once("?>").map(|(_, b)| b))
            .unwrap_or(svg);
        let _ = writeln!(
            out,
            "<figure>\n{}\n<figcaption>{}</figcaption>\n</figure>",
            body.trim(),
            escape(caption)
        );
    }
    let _ = writeln!(
        out,
        "<p>Made by sagtrip {}.</p>\n</body>\n</html>",
        env!("CARGO_PKG_VERSION")
    );
    out
}

/// The HTML report's static thresholds, if found.
fn html_thresholds(out: &mut String, table: &Table) {
    if let Some(t) = &table.thresholds {
        let _ = writeln!(
            out,
            "<h2>Static thresholds</h2>\n<p>Each level held {} s, found by bisection to {} V.</p>\n\
             <table>\n<tr><th>side</th><th>trip</th><th>reset</th><th>hysteresis</th>\
             <th>slow ramp</th></tr>",
            t.hold_s, t.resolution_v
        );
        for [side, trip, reset, hysteresis, ramp] in threshold_rows(t) {
            let _ = writeln!(
                out,
                "<tr><td>{side}</td><td class=\"num\">{trip}</td><td class=\"num\">{reset}</td>\
                 <td class=\"num\">{hysteresis}</td><td>{}</td></tr>",
                escape(&ramp)
            );
        }
        let _ = writeln!(out, "</table>");
        for s in [&t.under, &t.over] {
            if let Some(note) = &s.note {
                let _ = writeln!(out, "<p>{}</p>", escape(note));
            }
        }
    }
}

/// The HTML report's longest ride-through per level, if searched.
fn html_ride_through(out: &mut String, table: &Table) {
    if !table.longest_ride_through.is_empty() {
        let _ = writeln!(
            out,
            "<h2>Longest ride-through</h2>\n<p>{}</p>\n<table>\n<tr><th>residual</th>\
             <th>longest ridden through</th><th>shortest trip</th></tr>",
            escape(&ride_through_text(table))
        );
        for [level, ride, trip] in ride_through_rows(table) {
            let _ = writeln!(
                out,
                "<tr><td class=\"num\">{level}</td><td class=\"num\">{}</td>\
                 <td class=\"num\">{}</td></tr>",
                escape(&ride),
                escape(&trip)
            );
        }
        let _ = writeln!(out, "</table>");
    }
}

/// The HTML report's threshold spread over the tolerance cases, if any.
fn html_spread(out: &mut String, table: &Table) {
    if let Some(spread) = &table.threshold_spread {
        let _ = writeln!(
            out,
            "<p>Over the {} tolerance cases (the table above is the nominal case):</p>\n\
             <table>\n<tr><th>threshold</th><th>min</th><th>typical</th><th>max</th></tr>",
            spread.cases
        );
        for [name, lo, typ, hi] in spread_rows(spread) {
            let _ = writeln!(
                out,
                "<tr><td>{name}</td><td class=\"num\">{lo}</td><td class=\"num\">{typ}</td>\
                 <td class=\"num\">{hi}</td></tr>"
            );
        }
        let _ = writeln!(out, "</table>");
    }
}

/// The HTML report's tolerance screening, if done.
fn html_screening(out: &mut String, table: &Table) {
    if !table.screening.effects.is_empty() {
        let _ = writeln!(
            out,
            "<h2>Tolerance screening</h2>\n<p>{}</p>\n<table>\n<tr><th>value</th>\
             <th>share of a spread</th><th>change</th><th>in</th><th>corners</th></tr>",
            escape(SCREENING_TEXT)
        );
        for [field, percent, change, quantity, kept] in screening_rows(&table.screening.effects) {
            let _ = writeln!(
                out,
                "<tr><td><code>{}</code></td><td class=\"num\">{percent}</td>\
                 <td class=\"num\">{}</td><td>{}</td><td>{kept}</td></tr>",
                escape(&field),
                escape(&change),
                escape(&quantity)
            );
        }
        let _ = writeln!(out, "</table>");
        if let Some(text) = allowance_text(&table.screening) {
            let _ = writeln!(out, "<p>{}</p>", escape(&text));
        }
    }
}

/// The trip map of an HTML report: a coarse grid run from the settled protector (the sweep
/// command refines maps further).
#[derive(Clone, Debug, PartialEq)]
pub struct ReportMap {
    /// Levels, percent of nominal (dips below 100, swells above).
    pub levels_pct: Vec<f64>,
    /// How many durations, log-spaced from half a cycle to `longest_s`; 0 for no map.
    pub durations: usize,
    /// The longest duration, seconds.
    pub longest_s: f64,
    /// Start phase angles, degrees.
    pub phases_deg: Vec<f64>,
}

impl Default for ReportMap {
    /// Dips to 0, 10 .. 90% and swells to 110, 120, 130 and 150%, 10 durations from half a
    /// cycle to 10 s, at 0 and 90 degrees: 280 runs.
    fn default() -> Self {
        Self {
            levels_pct: (0..10)
                .map(|k| f64::from(k) * 10.0)
                .chain([110.0, 120.0, 130.0, 150.0])
                .collect(),
            durations: 10,
            longest_s: 10.0,
            phases_deg: vec![0.0, 90.0],
        }
    }
}

impl ReportMap {
    /// The grid at `frequency_hz` (its shortest duration is half a cycle).
    pub fn grid(&self, frequency_hz: f64) -> crate::sweep::Grid {
        crate::sweep::Grid {
            levels_pct: self.levels_pct.clone(),
            durations_s: if self.durations == 0 {
                Vec::new()
            } else {
                crate::sweep::log_durations(0.5 / frequency_hz, self.longest_s, self.durations)
            },
            phases_deg: self.phases_deg.clone(),
        }
    }
}

/// The whole HTML report of a table: the page with its trip map (run here on `settled`,
/// `progress` told of each point) and the threshold plot. A map with no durations is left
/// out.
pub fn html_report(
    table: &Table,
    settled: &Settled,
    circuit: &Circuit,
    map: &ReportMap,
    progress: &dyn Progress,
) -> Result<String, crate::plot::PlotError> {
    let mut figures: Vec<(String, String)> = Vec::new();
    let grid = map.grid(settled.frequency_hz);
    if !grid.points().is_empty() {
        progress.stage("trip map", grid.points().len());
        let points =
            crate::sweep::run_grid(settled, circuit, &grid, DEFAULT_EDGE_S, &|| progress.done());
        let cells = crate::sweep::cells(&points);
        let phases: Vec<String> = grid.phases_deg.iter().map(|p| format!("{p}")).collect();
        figures.push((
            format!(
                "Trip map: worst case over {} degrees for each level and duration, with the \
                 reference ride-through curves and the longest ride-through per level \
                 (sagtrip sweep refines the boundary)",
                phases.join(" and ")
            ),
            crate::plot::map_svg(&crate::plot::MapData {
                title: format!("Trip map: {}", circuit.title),
                cells: &cells,
                durations_s: &grid.durations_s,
                levels_pct: &grid.levels_pct,
                boundaries: Vec::new(),
                duration_boundary: &table.longest_ride_through,
                frequency_hz: settled.frequency_hz,
            })?,
        ));
    }
    if let Some(t) = &table.thresholds {
        figures.push((
            "Static thresholds: the trip voltages from normal supply and the reset voltages \
             after a trip"
                .to_string(),
            crate::plot::thresholds_svg(t, &format!("Static thresholds: {}", circuit.title))?,
        ));
    }
    let refs: Vec<(&str, &str)> = figures
        .iter()
        .map(|(c, s)| (c.as_str(), s.as_str()))
        .collect();
    Ok(html(table, &refs))
}
