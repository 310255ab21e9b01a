//! What every batch picture shares: sizes, colours, the title strip,
//! labels kept apart, the value axis and the colour of a decision.

use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

use crate::report::plot::{draw_err, font, Area};

/// Width of every picture, pixels.
pub const PICTURE_WIDTH_PX: u32 = 1200;

/// Height of the histograms, pixels.
pub const HISTOGRAM_HEIGHT_PX: u32 = 560;

/// Height of the run chart (both panels), pixels.
pub const RUN_CHART_HEIGHT_PX: u32 = 760;

/// Height of the title strip of every picture, pixels.
pub(super) const HEADER_PX: u32 = 72;

// Colours of our own: slate ink, a steel-blue family for the data, brick
// red for the specification limits, an ochre for the control limits.
pub(super) const INK: RGBColor = RGBColor(38, 42, 48);
pub(super) const SOFT_INK: RGBColor = RGBColor(96, 100, 108);
pub(super) const GRID: RGBColor = RGBColor(232, 234, 238);
pub(super) const BAR: RGBColor = RGBColor(92, 128, 170);
pub(super) const BAR_EDGE: RGBColor = RGBColor(52, 80, 116);
pub(super) const LIMIT: RGBColor = RGBColor(176, 48, 40);
pub(super) const NOMINAL: RGBColor = RGBColor(120, 120, 120);
pub(super) const CENTRE: RGBColor = RGBColor(30, 96, 96);
pub(super) const CONTROL: RGBColor = RGBColor(196, 132, 20);
pub(super) const PASS_MARK: RGBColor = RGBColor(40, 120, 150);
pub(super) const FAIL_MARK: RGBColor = RGBColor(176, 48, 40);
pub(super) const INDETERMINATE_MARK: RGBColor = RGBColor(214, 150, 30);

pub(super) fn draw_header(
    area: &Area<'_>,
    width: u32,
    title: &str,
    subtitle: &str,
) -> std::result::Result<(), String> {
    let centre = (width / 2) as i32;
    area.draw(&Text::new(
        title.to_string(),
        (centre, 10),
        font(24.0)
            .color(&INK)
            .pos(Pos::new(HPos::Center, VPos::Top)),
    ))
    .map_err(draw_err)?;
    area.draw(&Text::new(
        subtitle.to_string(),
        (centre, 42),
        font(16.0)
            .color(&SOFT_INK)
            .pos(Pos::new(HPos::Center, VPos::Top)),
    ))
    .map_err(draw_err)?;
    Ok(())
}

/// Vertical distance kept between two line labels, pixels.
pub(super) const LABEL_PITCH_PX: i32 = 16;

/// Places labels `(x, y, …)` at their lines' heights, in top-to-bottom
/// order, at least `pitch` apart: overlapping neighbours are pushed apart
/// and each crowded group is centred on its lines.
pub(super) fn spread_labels<T>(mut labels: Vec<(i32, i32, T)>, pitch: i32) -> Vec<(i32, i32, T)> {
    labels.sort_by_key(|l| l.1);
    let wanted: Vec<i32> = labels.iter().map(|l| l.1).collect();
    let mut start = 0;
    while start < labels.len() {
        // A group: each label would touch the one before it.
        let mut end = start + 1;
        while end < labels.len() && wanted[end] - wanted[end - 1] < pitch {
            end += 1;
        }
        let n = (end - start) as i32;
        let centre = wanted[start..end].iter().sum::<i32>() / n;
        let top = centre - pitch * (n - 1) / 2;
        for (k, l) in labels[start..end].iter_mut().enumerate() {
            l.1 = top + pitch * k as i32;
        }
        start = end;
    }
    labels
}

/// The value axis: the limits with a tenth of the tolerance around them,
/// widened to the data but never more than one tolerance beyond a limit.
pub(super) fn value_view(values: &[f64], lower: f64, upper: f64) -> (f64, f64) {
    let tol = (upper - lower).abs().max(f64::MIN_POSITIVE);
    let (mut lo, mut hi) = (lower.min(upper), lower.max(upper));
    for &v in values.iter().filter(|v| v.is_finite()) {
        lo = lo.min(v.max(lower - tol));
        hi = hi.max(v.min(upper + tol));
    }
    let pad = 0.08 * (hi - lo);
    (lo - pad, hi + pad)
}

pub(super) fn decision_colour(decision: &str) -> RGBColor {
    match decision {
        "pass" => PASS_MARK,
        "fail" => FAIL_MARK,
        _ => INDETERMINATE_MARK,
    }
}

/// A value marked on a chart: (value, label, colour, dashed).
pub(super) type Mark = (f64, String, RGBColor, bool);

/// A mark drawn as a solid line.
pub(super) fn solid(value: f64, label: String, colour: RGBColor) -> Mark {
    (value, label, colour, false)
}

/// A mark drawn as a dashed line.
pub(super) fn dashed(value: f64, label: String, colour: RGBColor) -> Mark {
    (value, label, colour, true)
}
