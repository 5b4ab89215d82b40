//! The figure of one event run: stacked panels on one time axis.

use super::*;

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
pub(crate) fn decimate(time_ms: &[f64], values: &[f64], limit: usize) -> Vec<(f64, f64)> {
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

pub(crate) const COLORS: [RGBColor; 5] = [
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
    panels.extend(comparator_panels(circuit, &series));
    panels.extend(relay_panels(run, circuit, &time_ms, &series));
    let marks = marks(run);
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

/// A probe's series against milliseconds from the onset, decimated; `None` if not recorded.
type Series<'a> = dyn Fn(&Probe) -> Option<Vec<(f64, f64)>> + 'a;

/// The comparators' inputs in one panel and their outputs in another.
fn comparator_panels(circuit: &Circuit, series: &Series<'_>) -> Vec<Panel> {
    let mut panels = Vec::new();
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
    panels
}

/// Per relay: its coil current with the pick-up and drop-out levels, and its load path (the
/// contact's state from the located events, and the load's voltage).
fn relay_panels(
    run: &EventRun,
    circuit: &Circuit,
    time_ms: &[f64],
    series: &Series<'_>,
) -> Vec<Panel> {
    let t = &run.trace;
    let mut panels = Vec::new();
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
    panels
}

/// The marks: the trip and the reconnections.
fn marks(run: &EventRun) -> Vec<(f64, String)> {
    let mut marks = Vec::new();
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
    marks
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
