//! The static thresholds on a voltage axis.

use super::*;

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
