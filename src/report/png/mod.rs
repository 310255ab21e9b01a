//! PNG spectrum overlay: the measured spectrum with the predicted mode lines,
//! the picked partials and the residuals of the fit, in one 1400×900 picture.
//!
//! Conventions:
//! - The x axis of both panels is frequency in Hz, linear, from 0 to
//!   [`SpectrumPlot::max_frequency_hz`]. Both panels use the same left and
//!   right margins, so a frequency sits in the same pixel column in each.
//! - Levels are in dB re a full-scale sine, as produced by the spectrum
//!   stage; this module does not rescale them.
//! - Residuals are in cents, as handed in by the caller (conventionally
//!   1200·log₂(f_measured / f_predicted)); this module only draws them.
//! - The spectrum can hold far more bins than the plot has pixel columns.
//!   Before drawing, it is reduced to the largest level in each pixel column
//!   (`column_max`), so a peak one bin wide is still drawn at full height.
//! - Text uses the bundled DejaVu Sans (`assets/fonts/DejaVuSans.ttf`),
//!   registered under the family name [`FONT_FAMILY`]; no system font is
//!   looked up, so the picture is the same on every machine.
//!
//! The picture is drawn into memory, encoded with the `png` crate into
//! `NAME.part` and renamed into place. The bitmap backend's own file output
//! is not used because it picks the image format from the file extension,
//! and the temporary name ends in `.part`.

mod decay_panel;
mod model;
mod residual_panel;
mod spectrum_panel;
mod style;
mod write;

pub use crate::report::plot::FONT_FAMILY;
pub use model::{
    PlotLine, PlotPartial, SpectrumPlot, FLOOR_MARGIN_DB, HEIGHT_PX, LEVEL_HEADROOM_DB,
    LEVEL_SPAN_DB, MIN_RESIDUAL_RANGE_CENTS, RESIDUAL_GUIDE_CENTS, WIDTH_PX,
};
pub use write::write_png;

#[cfg(test)]
mod tests;
