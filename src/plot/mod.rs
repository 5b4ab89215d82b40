//! Plots of an event run: stacked, time-aligned panels of the supply, the comparators'
//! inputs and outputs, the relay coil current and the load path, with the event window
//! shaded and the measured latencies marked.
//!
//! SVG and PNG. Text is drawn with the `DejaVu` Sans font compiled into the binary, so PNG
//! output needs no fonts on the machine.

use crate::circuit::{Circuit, PartSpec};
use crate::engine::EventKind;
use crate::probe::Probe;
use crate::scenario::EventRun;
use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::FontStyle;
use std::path::Path;
use std::sync::Once;

mod event;
mod map;
mod recording;
pub mod reference_curves;
mod thresholds;
pub use event::*;
pub use map::*;
pub use recording::*;
pub use thresholds::*;

static FONT: Once = Once::new();

/// A figure that could not be drawn or written: the drawing backend's reason.
#[derive(Clone, Debug, PartialEq, thiserror::Error)]
#[error("plot: {0}")]
pub struct PlotError(pub String);

/// Draws the series legend of `chart` at `position`, in the style of every sagtrip plot.
pub(crate) fn legend<'a, DB: DrawingBackend + 'a, CT: plotters::coord::CoordTranslate>(
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
pub(crate) fn title_size(text: &str, width: u32) -> u32 {
    let chars = text.chars().count().max(1) as f64;
    ((f64::from(width) - 40.0) / (0.55 * chars)).clamp(11.0, 20.0) as u32
}

/// Registers the embedded font as "sans-serif" (once per process).
pub(crate) fn register_font() {
    FONT.call_once(|| {
        // The font is compiled in and valid; registration cannot fail for it.
        let _ = plotters::style::register_font(
            "sans-serif",
            FontStyle::Normal,
            include_bytes!("../../assets/fonts/DejaVuSans.ttf"),
        );
    });
}
