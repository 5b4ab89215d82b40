//! A recording's Urms(1/2) with its events and trips, and the events against the ITI curve.

use super::*;

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

impl RecordingPlot<'_> {
    /// Whether the protector tripped on event `k` (false when not replayed).
    fn tripped_on(&self, k: usize) -> bool {
        self.tripped
            .as_ref()
            .and_then(|t| t.get(k))
            .copied()
            .unwrap_or(false)
    }

    /// Urms(1/2) over time: (seconds, percent of the declared voltage).
    fn urms_percent(&self) -> Vec<(f64, f64)> {
        self.detection
            .half_cycles
            .iter()
            .map(|h| (h.time_s, 100.0 * h.rms_v / self.declared_v))
            .collect()
    }
}

/// A faint vertical line from 0 to `y_max` at each of `times`, in `colour`: instants of the
/// protector drawn under the Urms(1/2) trace.
fn instants(
    times: &[f64],
    y_max: f64,
    colour: RGBColor,
) -> impl Iterator<Item = PathElement<(f64, f64)>> + '_ {
    times.iter().map(move |&t| {
        PathElement::new(
            vec![(t, 0.0), (t, y_max)],
            ShapeStyle::from(&colour.mix(0.45)).stroke_width(1),
        )
    })
}

fn draw_recording<DB: DrawingBackend>(
    root: DrawingArea<DB, Shift>,
    p: &RecordingPlot<'_>,
) -> Result<(), PlotError> {
    let e = |e: DrawingAreaErrorKind<DB::ErrorType>| PlotError(format!("{e:?}"));
    root.fill(&WHITE).map_err(e)?;
    let root = root
        .titled(&p.title, ("sans-serif", title_size(&p.title, 1100)))
        .map_err(e)?;
    let (top, bottom) = root.split_vertically(430);
    let urms = p.urms_percent();
    let y_max = urms.iter().map(|q| q.1).fold(120.0_f64, f64::max) + 5.0;
    draw_urms_panel(&top, p, &urms, y_max)?;
    draw_iti_panel(&bottom, p, y_max)?;
    root.present().map_err(e)?;
    Ok(())
}

/// The upper panel: Urms(1/2) over time, the events shaded, the thresholds, the trips and
/// reconnections.
fn draw_urms_panel<DB: DrawingBackend>(
    top: &DrawingArea<DB, Shift>,
    p: &RecordingPlot<'_>,
    points: &[(f64, f64)],
    y_max: f64,
) -> Result<(), PlotError> {
    use crate::detect::DisturbanceKind as K;
    let e = |e: DrawingAreaErrorKind<DB::ErrorType>| PlotError(format!("{e:?}"));
    let times: Vec<f64> = points.iter().map(|q| q.0).collect();
    let values: Vec<f64> = points.iter().map(|q| q.1).collect();
    let thinned = decimate(&times, &values, 4000);
    let x1 = p.detection.duration_s.max(1e-3);
    let mut chart = ChartBuilder::on(top)
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
        let tripped = p.tripped_on(k);
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
            .draw_series(instants(&p.trips, y_max, RED))
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
            .draw_series(instants(&p.reconnections, y_max, green))
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

    Ok(())
}

/// The lower panel: each event's duration and level against the ITI curve.
fn draw_iti_panel<DB: DrawingBackend>(
    bottom: &DrawingArea<DB, Shift>,
    p: &RecordingPlot<'_>,
    y_max: f64,
) -> Result<(), PlotError> {
    let e = |e: DrawingAreaErrorKind<DB::ErrorType>| PlotError(format!("{e:?}"));
    // The events on the ITI (CBEMA) curve.
    let mut chart = ChartBuilder::on(bottom)
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
    for (curve, style) in super::reference_curves::curves(1e-3, 100.0)
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
        .map(|(k, ev)| (ev.duration_s.max(1e-3), ev.level_pct, p.tripped_on(k)))
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
