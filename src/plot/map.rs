//! The trip map: cells by outcome, boundaries, reference curves.

use super::*;
use plotters::coord::combinators::LogCoord;
use plotters::coord::types::RangedCoordf64;

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
    draw_cells(&mut chart, map, &x_edges, &y_edges)?;
    draw_references(&mut chart, map, (x0, x1), y_top)?;
    draw_boundaries(&mut chart, map, (x0, x1), y_top)?;
    legend(&mut chart, SeriesLabelPosition::LowerRight)?;
    root.present().map_err(e)?;
    Ok(())
}

/// The map's chart: log duration across, level up.
type MapChart<'a, DB> = ChartContext<'a, DB, Cartesian2d<LogCoord<f64>, RangedCoordf64>>;

/// The grid's cells, coloured by outcome and labelled with the worst trip latency, and the
/// outcomes' legend entries.
fn draw_cells<DB: DrawingBackend>(
    chart: &mut MapChart<'_, DB>,
    map: &MapData<'_>,
    x_edges: &[f64],
    y_edges: &[f64],
) -> Result<(), PlotError> {
    use crate::sweep::Outcome;
    let e = |e: DrawingAreaErrorKind<DB::ErrorType>| PlotError(format!("{e:?}"));
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
    Ok(())
}

/// The published reference curves and the IEC 61000-4-11 test points.
fn draw_references<DB: DrawingBackend>(
    chart: &mut MapChart<'_, DB>,
    map: &MapData<'_>,
    (x0, x1): (f64, f64),
    y_top: f64,
) -> Result<(), PlotError> {
    let e = |e: DrawingAreaErrorKind<DB::ErrorType>| PlotError(format!("{e:?}"));
    // Reference curves.
    let styles = [
        ShapeStyle::from(&BLACK).stroke_width(2),
        ShapeStyle::from(&RGBColor(90, 90, 90)).stroke_width(2),
        ShapeStyle::from(&RGBColor(31, 119, 180)).stroke_width(2),
    ];
    for (curve, style) in super::reference_curves::curves(x0, x1)
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
    let iec: Vec<(f64, f64)> = super::reference_curves::iec_test_points(map.frequency_hz)
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
    Ok(())
}

/// The refined level boundaries and the longest ride-through per level.
fn draw_boundaries<DB: DrawingBackend>(
    chart: &mut MapChart<'_, DB>,
    map: &MapData<'_>,
    (x0, x1): (f64, f64),
    y_top: f64,
) -> Result<(), PlotError> {
    let e = |e: DrawingAreaErrorKind<DB::ErrorType>| PlotError(format!("{e:?}"));
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
