//! Plots of an event run: stacked, time-aligned panels of the supply, the comparators'
//! inputs and outputs, the relay coil current and the load path, with the event window
//! shaded and the measured latencies marked.
//!
//! SVG and PNG. Text is drawn with the DejaVu Sans font compiled into the binary, so PNG
//! output needs no fonts on the machine.

use std::path::Path;
use std::sync::Once;

use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::FontStyle;

use crate::circuit::{Circuit, PartSpec};
use crate::engine::EventKind;
use crate::probe::Probe;
use crate::scenario::EventRun;

static FONT: Once = Once::new();

/// A figure that could not be drawn or written: the drawing backend's reason.
#[derive(Clone, Debug, PartialEq, thiserror::Error)]
#[error("plot: {0}")]
pub struct PlotError(pub String);

/// Draws the series legend of `chart` at `position`, in the style of every sagtrip plot.
fn legend<'a, DB: DrawingBackend + 'a, CT: plotters::coord::CoordTranslate>(
    chart: &mut ChartContext<'a, DB, CT>,
    position: SeriesLabelPosition,
) -> Result<(), PlotError> {
    chart
        .configure_series_labels()
        .position(position)
        .label_font(("sans-serif", 12))
        .background_style(WHITE.mix(0.85))
        .border_style(BLACK.mix(0.3))
        .draw()
        .map_err(|e| PlotError(format!("{e:?}")))
}

/// A title font size that fits `text` in `width` pixels (about 0.55 em per character),
/// from 20 down to 11 points.
fn title_size(text: &str, width: u32) -> u32 {
    let chars = text.chars().count().max(1) as f64;
    ((f64::from(width) - 40.0) / (0.55 * chars)).clamp(11.0, 20.0) as u32
}

/// Registers the embedded font as "sans-serif" (once per process).
fn register_font() {
    FONT.call_once(|| {
        // The font is compiled in and valid; registration cannot fail for it.
        let _ = plotters::style::register_font(
            "sans-serif",
            FontStyle::Normal,
            include_bytes!("../assets/fonts/DejaVuSans.ttf"),
        );
    });
}

/// The probes a plot of `circuit` needs: comparator inputs, coil currents, load nodes.
pub fn plot_probes(circuit: &Circuit) -> Vec<Probe> {
    let mut probes = Vec::new();
    for (index, part) in circuit.parts.iter().enumerate() {
        match &part.spec {
            PartSpec::Comparator(_) => {
                for &node in &part.pins[..2] {
                    probes.push(Probe::Voltage { node });
                }
            }
            PartSpec::Relay(_) => {
                probes.push(Probe::Current { part: index });
                probes.push(Probe::Voltage { node: part.pins[3] });
            }
            _ => {}
        }
    }
    probes.dedup();
    probes
}

/// One line of a panel.
struct Line {
    label: String,
    points: Vec<(f64, f64)>,
}

/// At most about `limit` points, keeping each bucket's extremes (so spikes survive).
fn decimate(time_ms: &[f64], values: &[f64], limit: usize) -> Vec<(f64, f64)> {
    let n = time_ms.len().min(values.len());
    if n <= limit {
        return (0..n).map(|k| (time_ms[k], values[k])).collect();
    }
    let bucket = n.div_ceil(limit / 2);
    let mut out = Vec::with_capacity(limit + 2);
    for start in (0..n).step_by(bucket) {
        let end = (start + bucket).min(n);
        let (mut lo, mut hi) = (start, start);
        for k in start..end {
            if values[k] < values[lo] {
                lo = k;
            }
            if values[k] > values[hi] {
                hi = k;
            }
        }
        let (a, b) = if lo <= hi { (lo, hi) } else { (hi, lo) };
        out.push((time_ms[a], values[a]));
        if b != a {
            out.push((time_ms[b], values[b]));
        }
    }
    out
}

const COLORS: [RGBColor; 5] = [
    RGBColor(31, 119, 180),
    RGBColor(214, 39, 40),
    RGBColor(44, 160, 44),
    RGBColor(148, 103, 189),
    RGBColor(255, 127, 14),
];

/// One panel: caption, unit of the y axis, lines, labelled horizontal levels.
struct Panel {
    caption: String,
    unit: String,
    lines: Vec<Line>,
    levels: Vec<(f64, String)>,
}

/// Panels and annotations of a run.
struct Figure {
    title: String,
    panels: Vec<Panel>,
    onset_ms: f64,
    end_ms: f64,
    x_range: (f64, f64),
    marks: Vec<(f64, String)>,
}

fn build(run: &EventRun, circuit: &Circuit, name: &str) -> Figure {
    // Skipped steady-state cycles are drawn as the cycle they repeat.
    let expanded = run.trace.expanded();
    let t = &expanded;
    let time_ms: Vec<f64> = t.time.iter().map(|x| (x - run.onset_s) * 1e3).collect();
    let series = |probe: &Probe| -> Option<Vec<(f64, f64)>> {
        t.column(probe).map(|c| decimate(&time_ms, c, 3000))
    };
    let mut panels = Vec::new();
    // Supply.
    if let Some(mains) = t.probes.first() {
        if let Some(points) = series(mains) {
            panels.push(Panel {
                caption: "supply".into(),
                unit: "V".into(),
                lines: vec![Line {
                    label: mains.label(circuit),
                    points,
                }],
                levels: Vec::new(),
            });
        }
    }
    // Comparator inputs and outputs.
    let mut inputs = Vec::new();
    let mut outputs = Vec::new();
    for part in circuit
        .parts
        .iter()
        .filter(|p| matches!(p.spec, PartSpec::Comparator(_)))
    {
        for &node in &part.pins[..2] {
            let probe = Probe::Voltage { node };
            if inputs
                .iter()
                .all(|l: &Line| l.label != probe.label(circuit))
            {
                if let Some(points) = series(&probe) {
                    inputs.push(Line {
                        label: probe.label(circuit),
                        points,
                    });
                }
            }
        }
        if let Some(points) = series(&Probe::Voltage { node: part.pins[2] }) {
            outputs.push(Line {
                label: format!("{} output", part.name),
                points,
            });
        }
    }
    if !inputs.is_empty() {
        panels.push(Panel {
            caption: "comparator inputs".into(),
            unit: "V".into(),
            lines: inputs,
            levels: Vec::new(),
        });
    }
    if !outputs.is_empty() {
        panels.push(Panel {
            caption: "comparator outputs".into(),
            unit: "V".into(),
            lines: outputs,
            levels: Vec::new(),
        });
    }
    // Relays: coil current with pick-up and drop-out levels; load path.
    let mut marks = Vec::new();
    for (index, part) in circuit.parts.iter().enumerate() {
        let PartSpec::Relay(r) = &part.spec else {
            continue;
        };
        if let Some(points) = series(&Probe::Current { part: index }) {
            let points: Vec<(f64, f64)> = points
                .into_iter()
                .map(|(x, y)| (x, y.abs() * 1e3))
                .collect();
            panels.push(Panel {
                caption: format!("{} coil current", part.name),
                unit: "mA".into(),
                lines: vec![Line {
                    label: "coil".into(),
                    points,
                }],
                levels: vec![
                    (r.pickup_current * 1e3, "pick-up".into()),
                    (r.dropout_current * 1e3, "drop-out".into()),
                ],
            });
        }
        // Contact state from the located events.
        let mut closed =
            run.measurements.trip_latency_ms.is_some() || run.measurements.load_connected_at_end;
        let x0 = time_ms.first().copied().unwrap_or(0.0);
        let x1 = time_ms.last().copied().unwrap_or(0.0);
        let mut state = vec![(x0, f64::from(u8::from(closed)))];
        for e in t.events.iter().filter(|e| e.part == index) {
            let x = (e.time - run.onset_s) * 1e3;
            let now = match e.kind {
                EventKind::NormallyOpenMade => true,
                EventKind::NormallyOpenBroken => false,
                _ => continue,
            };
            state.push((x, f64::from(u8::from(closed))));
            state.push((x, f64::from(u8::from(now))));
            closed = now;
        }
        state.push((x1, f64::from(u8::from(closed))));
        let mut lines = vec![Line {
            label: "normally-open contact (1 = closed)".into(),
            points: state,
        }];
        let load = Probe::Voltage { node: part.pins[3] };
        if let Some(points) = series(&load) {
            let peak = points.iter().fold(1.0_f64, |m, p| m.max(p.1.abs()));
            lines.push(Line {
                label: format!("{} / {:.0} V", load.label(circuit), peak),
                points: points.into_iter().map(|(x, y)| (x, y / peak)).collect(),
            });
        }
        panels.push(Panel {
            caption: "load path".into(),
            unit: String::new(),
            lines,
            levels: Vec::new(),
        });
    }
    let m = &run.measurements;
    if let Some(trip) = m.trip_latency_ms {
        marks.push((trip, format!("trip {trip:.1} ms")));
    }
    if let Some(restore) = m.restore_latency_ms {
        let end = (run.event_end_s - run.onset_s) * 1e3;
        marks.push((
            end + restore,
            format!("reconnected {restore:.1} ms after the end"),
        ));
    } else {
        // Reconnected for good before the event's end (a sequence): mark each reconnection.
        for r in &m.reconnections {
            marks.push((
                r.since_onset_ms,
                format!("reconnected at {:.1} ms", r.since_onset_ms),
            ));
        }
    }
    Figure {
        title: format!("{}: {} ({})", name, run.event, circuit.title),
        panels,
        onset_ms: 0.0,
        end_ms: (run.event_end_s - run.onset_s) * 1e3,
        x_range: (
            time_ms.first().copied().unwrap_or(0.0),
            time_ms.last().copied().unwrap_or(1.0),
        ),
        marks,
    }
}

fn draw<DB: DrawingBackend>(
    root: DrawingArea<DB, Shift>,
    figure: &Figure,
) -> Result<(), PlotError> {
    let e = |e: DrawingAreaErrorKind<DB::ErrorType>| PlotError(format!("{e:?}"));
    root.fill(&WHITE).map_err(e)?;
    let root = root
        .titled(
            &figure.title,
            ("sans-serif", title_size(&figure.title, SIZE.0)),
        )
        .map_err(e)?;
    let areas = root.split_evenly((figure.panels.len().max(1), 1));
    let (x0, x1) = figure.x_range;
    let last = figure.panels.len().saturating_sub(1);
    for (k, (panel, area)) in figure.panels.iter().zip(&areas).enumerate() {
        let Panel {
            caption,
            unit,
            lines,
            levels,
        } = panel;
        let mut y0 = f64::INFINITY;
        let mut y1 = f64::NEG_INFINITY;
        for line in lines {
            for &(_, y) in &line.points {
                y0 = y0.min(y);
                y1 = y1.max(y);
            }
        }
        for (y, _) in levels {
            y0 = y0.min(*y);
            y1 = y1.max(*y);
        }
        if !y0.is_finite() || !y1.is_finite() {
            continue;
        }
        // Room above the data for the legend (a fifth of the data range per entry), so
        // that the legend never hides a trace.
        let pad = ((y1 - y0) * 0.08).max(1e-6);
        let entries = (lines.len() + levels.len()) as f64;
        let (y0, y1) = (y0 - pad, y1 + pad + (y1 - y0 + 2.0 * pad) * 0.2 * entries);
        let mut chart = ChartBuilder::on(area)
            .margin(6)
            .caption(caption, ("sans-serif", 15))
            .x_label_area_size(if k == last { 34 } else { 18 })
            .y_label_area_size(56)
            .build_cartesian_2d(x0..x1, y0..y1)
            .map_err(e)?;
        let mut mesh = chart.configure_mesh();
        mesh.y_desc(unit.as_str())
            .label_style(("sans-serif", 12))
            .light_line_style(RGBColor(235, 235, 235));
        if k == last {
            mesh.x_desc("time since onset (ms)");
        }
        mesh.draw().map_err(e)?;
        // The event window.
        chart
            .draw_series(std::iter::once(Rectangle::new(
                [(figure.onset_ms, y0), (figure.end_ms, y1)],
                RGBColor(255, 224, 178).mix(0.5).filled(),
            )))
            .map_err(e)?;
        for (y, label) in levels {
            chart
                .draw_series(LineSeries::new(
                    vec![(x0, *y), (x1, *y)],
                    ShapeStyle::from(&BLACK.mix(0.5)).stroke_width(1),
                ))
                .map_err(e)?
                .label(format!("{label} {y:.1} {unit}"))
                .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 16, y)], BLACK.mix(0.5)));
        }
        for (i, line) in lines.iter().enumerate() {
            let color = COLORS[i % COLORS.len()];
            chart
                .draw_series(LineSeries::new(line.points.iter().copied(), &color))
                .map_err(e)?
                .label(line.label.as_str())
                .legend(move |(x, y)| PathElement::new(vec![(x, y), (x + 16, y)], color));
        }
        // The trip and reconnection marks: black (no trace is black), in every panel,
        // labelled in the last one just right of the line and low, clear of the legend.
        for (x, label) in &figure.marks {
            chart
                .draw_series(LineSeries::new(
                    vec![(*x, y0), (*x, y1)],
                    ShapeStyle::from(&BLACK.mix(0.75)).stroke_width(1),
                ))
                .map_err(e)?;
            if k == last {
                chart
                    .draw_series(std::iter::once(
                        EmptyElement::at((*x, y0 + 0.12 * (y1 - y0)))
                            + Text::new(
                                label.clone(),
                                (4, -7),
                                ("sans-serif", 13).into_font().color(&BLACK),
                            ),
                    ))
                    .map_err(e)?;
            }
        }
        legend(&mut chart, SeriesLabelPosition::UpperRight)?;
    }
    root.present().map_err(e)?;
    Ok(())
}

/// Size of a plot in pixels.
const SIZE: (u32, u32) = (1100, 1200);

/// Renders the run as SVG text.
pub fn event_svg(run: &EventRun, circuit: &Circuit, name: &str) -> Result<String, PlotError> {
    register_font();
    let figure = build(run, circuit, name);
    let mut svg = String::new();
    draw(
        SVGBackend::with_string(&mut svg, SIZE).into_drawing_area(),
        &figure,
    )?;
    Ok(svg)
}

/// Renders the run as a PNG file at `path` (written whole or not at all by the caller's
/// choice of a temporary path).
pub fn event_png(
    run: &EventRun,
    circuit: &Circuit,
    name: &str,
    path: &Path,
) -> Result<(), PlotError> {
    register_font();
    let figure = build(run, circuit, name);
    draw(BitMapBackend::new(path, SIZE).into_drawing_area(), &figure)
}

/// What a trip map shows.
pub struct MapData<'a> {
    /// Title: the circuit.
    pub title: String,
    /// Cells (worst case over phases).
    pub cells: &'a [crate::sweep::Cell],
    /// The grid's durations, seconds, ascending.
    pub durations_s: &'a [f64],
    /// The grid's levels, percent, ascending.
    pub levels_pct: &'a [f64],
    /// Refined boundaries (dips, then swells).
    pub boundaries: Vec<&'a [crate::sweep::BoundaryPoint]>,
    /// The longest ride-through at each level (the map's other edge), by level.
    pub duration_boundary: &'a [crate::sweep::DurationBoundaryPoint],
    /// Mains frequency, for the IEC test points.
    pub frequency_hz: f64,
}

/// Edges between grid values (geometric midpoints when `log`), extended at both ends.
fn edges(values: &[f64], log: bool) -> Vec<f64> {
    let mid = |a: f64, b: f64| if log { (a * b).sqrt() } else { 0.5 * (a + b) };
    let n = values.len();
    if n == 0 {
        return Vec::new();
    }
    if n == 1 {
        return if log {
            vec![values[0] / 1.5, values[0] * 1.5]
        } else {
            vec![values[0] - 5.0, values[0] + 5.0]
        };
    }
    let mut e = Vec::with_capacity(n + 1);
    let first = if log {
        values[0] * values[0] / mid(values[0], values[1])
    } else {
        2.0 * values[0] - mid(values[0], values[1])
    };
    e.push(first);
    for k in 1..n {
        e.push(mid(values[k - 1], values[k]));
    }
    let last = if log {
        values[n - 1] * values[n - 1] / mid(values[n - 2], values[n - 1])
    } else {
        2.0 * values[n - 1] - mid(values[n - 2], values[n - 1])
    };
    e.push(last);
    e
}

fn draw_map<DB: DrawingBackend>(
    root: DrawingArea<DB, Shift>,
    map: &MapData<'_>,
) -> Result<(), PlotError> {
    use crate::sweep::Outcome;
    let e = |e: DrawingAreaErrorKind<DB::ErrorType>| PlotError(format!("{e:?}"));
    root.fill(&WHITE).map_err(e)?;
    let x_edges = edges(map.durations_s, true);
    let mut y_edges = edges(map.levels_pct, false);
    let (x0, x1) = (
        x_edges.first().copied().unwrap_or(0.005).max(1e-3),
        x_edges.last().copied().unwrap_or(20.0),
    );
    let y_top = y_edges.last().copied().unwrap_or(100.0).max(125.0);
    if let Some(first) = y_edges.first_mut() {
        *first = first.max(-2.0);
    }
    let y0 = y_edges.first().copied().unwrap_or(0.0).min(0.0) - 2.0;
    let mut chart = ChartBuilder::on(&root)
        .margin(12)
        .caption(
            &map.title,
            ("sans-serif", title_size(&map.title, MAP_SIZE.0)),
        )
        .x_label_area_size(45)
        .y_label_area_size(60)
        .build_cartesian_2d((x0..x1).log_scale(), y0..y_top)
        .map_err(e)?;
    chart
        .configure_mesh()
        .x_desc("event duration (s, log scale)")
        .y_desc("level during the event (% of nominal)")
        .label_style(("sans-serif", 13))
        .light_line_style(RGBColor(235, 235, 235))
        .draw()
        .map_err(e)?;
    let colour = |o: Outcome| match o {
        Outcome::RidesThrough => RGBColor(200, 235, 200),
        Outcome::Trips => RGBColor(250, 200, 170),
        Outcome::Chatters => RGBColor(210, 170, 240),
        Outcome::Failed => RGBColor(200, 200, 200),
    };
    for c in map.cells {
        let (Some(i), Some(j)) = (
            map.durations_s.iter().position(|d| *d == c.duration_s),
            map.levels_pct.iter().position(|l| *l == c.level_pct),
        ) else {
            continue;
        };
        let rect = [(x_edges[i], y_edges[j]), (x_edges[i + 1], y_edges[j + 1])];
        chart
            .draw_series(std::iter::once(Rectangle::new(
                rect,
                colour(c.outcome).filled(),
            )))
            .map_err(e)?;
        if let (Outcome::Trips | Outcome::Chatters, Some(t)) = (c.outcome, c.trip_latency_ms) {
            let x = (x_edges[i] * x_edges[i + 1]).sqrt();
            let y = 0.5 * (y_edges[j] + y_edges[j + 1]);
            chart
                .draw_series(std::iter::once(Text::new(
                    format!("{t:.0}"),
                    (x, y),
                    TextStyle::from(("sans-serif", 11).into_font()).pos(
                        plotters::style::text_anchor::Pos::new(
                            plotters::style::text_anchor::HPos::Center,
                            plotters::style::text_anchor::VPos::Center,
                        ),
                    ),
                )))
                .map_err(e)?;
        }
    }
    // Legend entries for the outcomes.
    for (label, o) in [
        ("rides through", Outcome::RidesThrough),
        ("trips (label: worst trip latency, ms)", Outcome::Trips),
        ("chatters", Outcome::Chatters),
        ("failed", Outcome::Failed),
    ] {
        let c = colour(o);
        chart
            .draw_series(std::iter::empty::<Rectangle<(f64, f64)>>())
            .map_err(e)?
            .label(label)
            .legend(move |(x, y)| Rectangle::new([(x, y - 5), (x + 14, y + 5)], c.filled()));
    }
    // Reference curves.
    let styles = [
        ShapeStyle::from(&BLACK).stroke_width(2),
        ShapeStyle::from(&RGBColor(90, 90, 90)).stroke_width(2),
        ShapeStyle::from(&RGBColor(31, 119, 180)).stroke_width(2),
    ];
    for (curve, style) in crate::reference_curves::curves(x0, x1)
        .into_iter()
        .zip(styles)
    {
        let points: Vec<(f64, f64)> = curve.points.into_iter().filter(|p| p.1 <= y_top).collect();
        chart
            .draw_series(LineSeries::new(points, style))
            .map_err(e)?
            .label(curve.label)
            .legend(move |(x, y)| PathElement::new(vec![(x, y), (x + 16, y)], style));
    }
    // IEC 61000-4-11 test points.
    let iec: Vec<(f64, f64)> = crate::reference_curves::iec_test_points(map.frequency_hz)
        .into_iter()
        .filter(|(_, d, _)| *d >= x0 && *d <= x1)
        .map(|(_, d, l)| (d, l))
        .collect();
    chart
        .draw_series(
            iec.iter()
                .map(|&p| TriangleMarker::new(p, 7, RGBColor(214, 39, 40).filled())),
        )
        .map_err(e)?
        .label("IEC 61000-4-11 class 2/3 test levels")
        .legend(|(x, y)| TriangleMarker::new((x + 7, y), 6, RGBColor(214, 39, 40).filled()));
    // Refined boundaries.
    for (k, list) in map.boundaries.iter().enumerate() {
        let points: Vec<(f64, f64)> = list
            .iter()
            .filter_map(|b| b.level_pct.map(|l| (b.duration_s, l)))
            .collect();
        if points.is_empty() {
            continue;
        }
        let style = ShapeStyle::from(&RGBColor(148, 0, 60)).stroke_width(3);
        let series = chart
            .draw_series(LineSeries::new(points.clone(), style))
            .map_err(e)?;
        if k == 0 {
            series
                .label("refined trip boundary (this circuit)")
                .legend(move |(x, y)| PathElement::new(vec![(x, y), (x + 16, y)], style));
        }
        chart
            .draw_series(
                points
                    .into_iter()
                    .map(|p| Circle::new(p, 3, style.filled())),
            )
            .map_err(e)?;
    }
    // The longest ride-through per level: a cross at each level's bracket (dips and
    // swells drawn apart, each joined across its levels).
    let navy = RGBColor(20, 40, 120);
    let style = ShapeStyle::from(&navy).stroke_width(2);
    let mut labelled = false;
    for swell in [false, true] {
        let points: Vec<(f64, f64)> = map
            .duration_boundary
            .iter()
            .filter(|b| (b.level_pct > 100.0) == swell)
            .filter(|b| b.status == crate::sweep::DurationSearch::Found)
            .filter_map(|b| b.longest_ride_through_s.map(|d| (d, b.level_pct)))
            .filter(|&(d, l)| d >= x0 && d <= x1 && l <= y_top)
            .collect();
        if points.is_empty() {
            continue;
        }
        chart
            .draw_series(LineSeries::new(
                points.clone(),
                ShapeStyle::from(&navy).stroke_width(1),
            ))
            .map_err(e)?;
        let series = chart
            .draw_series(points.into_iter().map(|p| Cross::new(p, 5, style)))
            .map_err(e)?;
        if !labelled {
            labelled = true;
            series
                .label("longest event ridden through, per level")
                .legend(move |(x, y)| Cross::new((x + 7, y), 5, style));
        }
    }
    legend(&mut chart, SeriesLabelPosition::LowerRight)?;
    root.present().map_err(e)?;
    Ok(())
}

/// Size of a map in pixels.
const MAP_SIZE: (u32, u32) = (1200, 800);

/// Renders a trip map as SVG text.
pub fn map_svg(map: &MapData<'_>) -> Result<String, PlotError> {
    register_font();
    let mut svg = String::new();
    draw_map(
        SVGBackend::with_string(&mut svg, MAP_SIZE).into_drawing_area(),
        map,
    )?;
    Ok(svg)
}

/// Renders a trip map as a PNG file at `path`.
pub fn map_png(map: &MapData<'_>, path: &Path) -> Result<(), PlotError> {
    register_font();
    draw_map(BitMapBackend::new(path, MAP_SIZE).into_drawing_area(), map)
}

/// What a recording plot shows.
pub struct RecordingPlot<'a> {
    /// Title: the recording (and circuit, for a replay).
    pub title: String,
    /// The detection.
    pub detection: &'a crate::detect::Detection,
    /// Declared voltage, volts.
    pub declared_v: f64,
    /// Thresholds used.
    pub thresholds: &'a crate::detect::Thresholds,
    /// Trips of a replay, seconds into the recording (none for `detect`).
    pub trips: Vec<f64>,
    /// Reconnections of a replay (the load path closing again), seconds into the recording.
    pub reconnections: Vec<f64>,
    /// For each event, whether the protector tripped on it (replay), in event order.
    pub tripped: Option<Vec<bool>>,
}

fn draw_recording<DB: DrawingBackend>(
    root: DrawingArea<DB, Shift>,
    p: &RecordingPlot<'_>,
) -> Result<(), PlotError> {
    use crate::detect::EventKind as K;
    let e = |e: DrawingAreaErrorKind<DB::ErrorType>| PlotError(format!("{e:?}"));
    root.fill(&WHITE).map_err(e)?;
    let root = root
        .titled(&p.title, ("sans-serif", title_size(&p.title, 1100)))
        .map_err(e)?;
    let (top, bottom) = root.split_vertically(430);
    // Urms(1/2) over time.
    let points: Vec<(f64, f64)> = p
        .detection
        .half_cycles
        .iter()
        .map(|h| (h.time_s, 100.0 * h.rms_v / p.declared_v))
        .collect();
    let times: Vec<f64> = points.iter().map(|q| q.0).collect();
    let values: Vec<f64> = points.iter().map(|q| q.1).collect();
    let thinned = decimate(&times, &values, 4000);
    let x1 = p.detection.duration_s.max(1e-3);
    let y_max = values.iter().copied().fold(120.0_f64, f64::max) + 5.0;
    let mut chart = ChartBuilder::on(&top)
        .margin(10)
        .margin_right(24)
        .caption("Urms(1/2), % of the declared voltage", ("sans-serif", 15))
        .x_label_area_size(36)
        .y_label_area_size(56)
        .build_cartesian_2d(0.0..x1, 0.0..y_max)
        .map_err(e)?;
    chart
        .configure_mesh()
        .x_desc("time into the recording (s)")
        .y_desc("%")
        .label_style(("sans-serif", 12))
        .light_line_style(RGBColor(235, 235, 235))
        .draw()
        .map_err(e)?;
    for (k, ev) in p.detection.events.iter().enumerate() {
        let colour = match ev.kind {
            K::Swell => RGBColor(250, 210, 160),
            K::Dip => RGBColor(200, 215, 250),
            K::Interruption => RGBColor(220, 200, 240),
        };
        let tripped = p
            .tripped
            .as_ref()
            .and_then(|t| t.get(k))
            .copied()
            .unwrap_or(false);
        chart
            .draw_series(std::iter::once(Rectangle::new(
                [(ev.start_s, 0.0), (ev.start_s + ev.duration_s, y_max)],
                colour.mix(if tripped { 0.9 } else { 0.6 }).filled(),
            )))
            .map_err(e)?;
    }
    let t = p.thresholds;
    for (level, label) in [
        (t.dip_pct, "dip threshold"),
        (t.swell_pct, "swell threshold"),
        (t.interruption_pct, "interruption threshold"),
    ] {
        chart
            .draw_series(LineSeries::new(
                vec![(0.0, level), (x1, level)],
                ShapeStyle::from(&BLACK.mix(0.4)).stroke_width(1),
            ))
            .map_err(e)?
            .label(format!("{label} {level}%"))
            .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 16, y)], BLACK.mix(0.4)));
    }
    if !p.trips.is_empty() {
        // Drawn under the Urms(1/2) trace so the trace stays readable; a marker at the top
        // makes each trip easy to find at any zoom.
        chart
            .draw_series(p.trips.iter().map(|&t| {
                PathElement::new(
                    vec![(t, 0.0), (t, y_max)],
                    ShapeStyle::from(&RED.mix(0.45)).stroke_width(1),
                )
            }))
            .map_err(e)?
            .label("protector trips")
            .legend(|(x, y)| TriangleMarker::new((x + 8, y), 5, RED.filled()));
        chart
            .draw_series(
                p.trips
                    .iter()
                    .map(|&t| TriangleMarker::new((t, y_max - 2.5), 6, RED.filled())),
            )
            .map_err(e)?;
    }
    if !p.reconnections.is_empty() {
        let green = RGBColor(30, 130, 50);
        chart
            .draw_series(p.reconnections.iter().map(|&t| {
                PathElement::new(
                    vec![(t, 0.0), (t, y_max)],
                    ShapeStyle::from(&green.mix(0.45)).stroke_width(1),
                )
            }))
            .map_err(e)?
            .label("protector reconnects")
            .legend(move |(x, y)| Circle::new((x + 8, y), 4, green.filled()));
        chart
            .draw_series(
                p.reconnections
                    .iter()
                    .map(|&t| Circle::new((t, y_max - 2.5), 5, green.filled())),
            )
            .map_err(e)?;
    }
    chart
        .draw_series(LineSeries::new(thinned, &COLORS[0]))
        .map_err(e)?
        .label("Urms(1/2)")
        .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 16, y)], COLORS[0]));
    legend(&mut chart, SeriesLabelPosition::LowerLeft)?;

    // The events on the ITI (CBEMA) curve.
    let mut chart = ChartBuilder::on(&bottom)
        .margin(10)
        .margin_right(24)
        .caption("events against the ITI (CBEMA) curve", ("sans-serif", 15))
        .x_label_area_size(36)
        .y_label_area_size(56)
        .build_cartesian_2d((1e-3..100.0).log_scale(), 0.0..y_max.max(130.0))
        .map_err(e)?;
    chart
        .configure_mesh()
        .x_desc("duration (s, log scale)")
        .y_desc("residual or magnitude (%)")
        .label_style(("sans-serif", 12))
        .light_line_style(RGBColor(235, 235, 235))
        .draw()
        .map_err(e)?;
    let styles = [
        ShapeStyle::from(&BLACK).stroke_width(2),
        ShapeStyle::from(&RGBColor(90, 90, 90)).stroke_width(2),
    ];
    for (curve, style) in crate::reference_curves::curves(1e-3, 100.0)
        .into_iter()
        .take(2)
        .zip(styles)
    {
        chart
            .draw_series(LineSeries::new(curve.points, style))
            .map_err(e)?
            .label(curve.label)
            .legend(move |(x, y)| PathElement::new(vec![(x, y), (x + 16, y)], style));
    }
    let marks: Vec<(f64, f64, bool)> = p
        .detection
        .events
        .iter()
        .enumerate()
        .map(|(k, ev)| {
            let tripped = p
                .tripped
                .as_ref()
                .and_then(|t| t.get(k))
                .copied()
                .unwrap_or(false);
            (ev.duration_s.max(1e-3), ev.level_pct, tripped)
        })
        .collect();
    chart
        .draw_series(
            marks
                .iter()
                .filter(|m| !m.2)
                .map(|&(d, l, _)| Circle::new((d, l), 6, COLORS[0].filled())),
        )
        .map_err(e)?
        .label(if p.tripped.is_some() {
            "event, ridden through"
        } else {
            "event"
        })
        .legend(|(x, y)| Circle::new((x + 8, y), 5, COLORS[0].filled()));
    if p.tripped.is_some() {
        chart
            .draw_series(
                marks
                    .iter()
                    .filter(|m| m.2)
                    .map(|&(d, l, _)| TriangleMarker::new((d, l), 8, RED.filled())),
            )
            .map_err(e)?
            .label("event, protector tripped")
            .legend(|(x, y)| TriangleMarker::new((x + 8, y), 6, RED.filled()));
    }
    legend(&mut chart, SeriesLabelPosition::UpperRight)?;
    root.present().map_err(e)?;
    Ok(())
}

/// Renders a recording plot as SVG text.
pub fn recording_svg(p: &RecordingPlot<'_>) -> Result<String, PlotError> {
    register_font();
    let mut svg = String::new();
    draw_recording(
        SVGBackend::with_string(&mut svg, (1100, 900)).into_drawing_area(),
        p,
    )?;
    Ok(svg)
}

/// Renders a recording plot as a PNG file at `path`.
pub fn recording_png(p: &RecordingPlot<'_>, path: &Path) -> Result<(), PlotError> {
    register_font();
    draw_recording(BitMapBackend::new(path, (1100, 900)).into_drawing_area(), p)
}

const THRESHOLD_SIZE: (u32, u32) = (1100, 360);

fn draw_thresholds<DB: DrawingBackend>(
    root: DrawingArea<DB, Shift>,
    t: &crate::thresholds::StaticThresholds,
    title: &str,
) -> Result<(), PlotError> {
    let e = |e: DrawingAreaErrorKind<DB::ErrorType>| PlotError(format!("{e:?}"));
    root.fill(&WHITE).map_err(e)?;
    let nominal = t.nominal_rms_v;
    let mut values = vec![nominal];
    for side in [&t.under, &t.over] {
        values.extend(side.trip.iter().chain(side.reset.iter()).map(|x| x.volts));
    }
    let lo = values.iter().copied().fold(f64::INFINITY, f64::min) - 0.08 * nominal;
    let hi = values.iter().copied().fold(f64::NEG_INFINITY, f64::max) + 0.08 * nominal;
    let mut chart = ChartBuilder::on(&root)
        .margin(12)
        .margin_right(24)
        .caption(title, ("sans-serif", 18))
        .x_label_area_size(40)
        .y_label_area_size(150)
        .build_cartesian_2d(lo..hi, 0.0..2.0)
        .map_err(e)?;
    chart
        .configure_mesh()
        .disable_y_mesh()
        .y_labels(5)
        .y_label_formatter(&|y: &f64| {
            if (*y - 1.5).abs() < 0.26 {
                "trip (from normal)".into()
            } else if (*y - 0.5).abs() < 0.26 {
                "reset (after a trip)".into()
            } else {
                String::new()
            }
        })
        .x_desc("supply voltage (V RMS)")
        .label_style(("sans-serif", 13))
        .light_line_style(RGBColor(235, 235, 235))
        .draw()
        .map_err(e)?;
    // The band where the load stays connected from normal (between the two trips), and
    // the band where it reconnects after a trip (between the two resets).
    let under_trip = t.under.trip.map_or(lo, |x| x.volts);
    let over_trip = t.over.trip.map_or(hi, |x| x.volts);
    let under_reset = t.under.reset.map_or(under_trip, |x| x.volts);
    let over_reset = t.over.reset.map_or(over_trip, |x| x.volts);
    for (x0, x1, y0, colour, label) in [
        (
            under_trip,
            over_trip,
            1.1,
            RGBColor(200, 235, 200),
            "load stays connected",
        ),
        (
            under_reset,
            over_reset,
            0.1,
            RGBColor(200, 220, 245),
            "load reconnects (after the delay)",
        ),
    ] {
        chart
            .draw_series(std::iter::once(Rectangle::new(
                [(x0, y0), (x1, y0 + 0.8)],
                colour.filled(),
            )))
            .map_err(e)?
            .label(label)
            .legend(move |(x, y)| Rectangle::new([(x, y - 5), (x + 16, y + 5)], colour.filled()));
    }
    chart
        .draw_series(std::iter::once(PathElement::new(
            vec![(nominal, 0.0), (nominal, 2.0)],
            ShapeStyle::from(&BLACK.mix(0.5)).stroke_width(1),
        )))
        .map_err(e)?
        .label(format!("nominal {nominal:.0} V"))
        .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 16, y)], BLACK.mix(0.5)));
    let mut marks: Vec<(f64, f64, String)> = Vec::new();
    for (th, y) in [
        (t.under.trip, 1.5),
        (t.over.trip, 1.5),
        (t.under.reset, 0.5),
        (t.over.reset, 0.5),
    ] {
        if let Some(th) = th {
            marks.push((th.volts, y, format!("{:.1} V", th.volts)));
        }
    }
    chart
        .draw_series(marks.iter().map(|(v, y, _)| {
            PathElement::new(
                vec![(*v, y - 0.4), (*v, y + 0.4)],
                ShapeStyle::from(&RED).stroke_width(2),
            )
        }))
        .map_err(e)?;
    chart
        .draw_series(marks.iter().map(|(v, y, label)| {
            Text::new(
                label.clone(),
                (*v, y + 0.42),
                ("sans-serif", 13).into_font().color(&RED),
            )
        }))
        .map_err(e)?;
    legend(&mut chart, SeriesLabelPosition::LowerRight)?;
    root.present().map_err(e)?;
    Ok(())
}

/// Renders the static thresholds as SVG: the trip voltages from normal and the reset
/// voltages after a trip, on a voltage axis with the nominal.
pub fn thresholds_svg(
    t: &crate::thresholds::StaticThresholds,
    title: &str,
) -> Result<String, PlotError> {
    register_font();
    let mut svg = String::new();
    draw_thresholds(
        SVGBackend::with_string(&mut svg, THRESHOLD_SIZE).into_drawing_area(),
        t,
        title,
    )?;
    Ok(svg)
}

/// Renders the static thresholds as a PNG file at `path`.
pub fn thresholds_png(
    t: &crate::thresholds::StaticThresholds,
    title: &str,
    path: &Path,
) -> Result<(), PlotError> {
    register_font();
    draw_thresholds(
        BitMapBackend::new(path, THRESHOLD_SIZE).into_drawing_area(),
        t,
        title,
    )
}
