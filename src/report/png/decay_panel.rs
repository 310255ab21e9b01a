//! The decay panel: T60 of every partial on a log axis, split pairs
//! joined by a bar.

use plotters::coord::combinators::LogCoord;
use plotters::coord::types::RangedCoordf64;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

use crate::report::plot::{draw_err, font, Area};

use super::model::{PlotPartial, SpectrumPlot};
use super::style::*;

/// T60 of every partial on a log axis, at the spectrum's frequencies;
/// a split pair shows both members joined by a bar and its splitting.
pub(super) fn draw_decay_panel(area: &Area<'_>, plot: &SpectrumPlot) -> Result<(), String> {
    let x_max = plot.max_frequency_hz;
    let in_view = |f: f64| f.is_finite() && f >= 0.0 && f <= x_max;
    let mut t60s: Vec<f64> = plot
        .partials
        .iter()
        .filter(|p| in_view(p.frequency_hz))
        .flat_map(|p| {
            let pair = p.pair.map(|(_, a, b)| [a, b]).unwrap_or([f64::NAN; 2]);
            [p.t60_s.unwrap_or(f64::NAN), pair[0], pair[1]]
        })
        .filter(|t| t.is_finite() && *t > 0.0)
        .collect();
    t60s.sort_by(f64::total_cmp);
    let (lo, hi) = match (t60s.first(), t60s.last()) {
        (Some(&a), Some(&b)) => ((a / 1.5).max(1e-3), (b * 1.5).max(a * 3.0)),
        _ => (0.01, 10.0),
    };
    let mut chart = ChartBuilder::on(area)
        .margin_top(8)
        .margin_bottom(8)
        .margin_left(LEFT_MARGIN_PX)
        .margin_right(RIGHT_MARGIN_PX)
        .x_label_area_size(40)
        .y_label_area_size(Y_LABEL_AREA_PX)
        .build_cartesian_2d(0.0..x_max, (lo..hi).log_scale())
        .map_err(draw_err)?;
    let y_fmt = |v: &f64| crate::base::units::sig(*v, 2);
    panel_mesh(&mut chart.configure_mesh())
        .y_labels(8)
        .y_label_formatter(&y_fmt)
        .x_desc("frequency (Hz)")
        .y_desc("T60 (s)")
        .draw()
        .map_err(draw_err)?;
    let visible = |p: &&PlotPartial| {
        in_view(p.frequency_hz) && p.t60_s.is_some_and(|t| t.is_finite() && t > 0.0)
    };
    let singles: Vec<&PlotPartial> = plot
        .partials
        .iter()
        .filter(visible)
        .filter(|p| p.pair.is_none())
        .collect();
    chart
        .draw_series(singles.iter().filter(|p| p.matched).map(|p| {
            Circle::new(
                (p.frequency_hz, p.t60_s.unwrap_or(1.0)),
                4,
                MATCHED_MARK_COLOUR.filled(),
            )
        }))
        .map_err(draw_err)?;
    chart
        .draw_series(singles.iter().filter(|p| !p.matched).map(|p| {
            Cross::new(
                (p.frequency_hz, p.t60_s.unwrap_or(1.0)),
                5,
                UNMATCHED_MARK_COLOUR.stroke_width(2),
            )
        }))
        .map_err(draw_err)?;
    let pairs: Vec<(f64, f64, f64, f64)> = plot
        .partials
        .iter()
        .filter(|p| in_view(p.frequency_hz))
        .filter_map(|p| p.pair.map(|(d, a, b)| (p.frequency_hz, d, a, b)))
        .filter(|&(_, _, a, b)| a.is_finite() && b.is_finite() && a > 0.0 && b > 0.0)
        .collect();
    draw_pairs(&mut chart, &pairs, (lo, hi))?;
    if t60s.is_empty() {
        let style = font(16.0)
            .color(&GUIDE_COLOUR)
            .pos(Pos::new(HPos::Center, VPos::Center));
        let (xr, yr) = chart.plotting_area().get_pixel_range();
        let root = chart.plotting_area().strip_coord_spec();
        let at = ((xr.end - xr.start) / 2, (yr.end - yr.start) / 2);
        root.draw(&Text::new("no decay measured", at, style))
            .map_err(draw_err)?;
    }
    Ok(())
}

/// The split pairs: both members' T60 joined by a bar, each pair labelled
/// with its splitting where the label has room.
fn draw_pairs(
    chart: &mut ChartContext<'_, BitMapBackend<'_>, Cartesian2d<RangedCoordf64, LogCoord<f64>>>,
    pairs: &[(f64, f64, f64, f64)],
    (lo, hi): (f64, f64),
) -> Result<(), String> {
    if pairs.is_empty() {
        return Ok(());
    }
    chart
        .draw_series(pairs.iter().map(|&(f, _, a, b)| {
            PathElement::new(
                vec![(f, a.clamp(lo, hi)), (f, b.clamp(lo, hi))],
                PAIR_COLOUR.stroke_width(2),
            )
        }))
        .map_err(draw_err)?;
    chart
        .draw_series(pairs.iter().flat_map(|&(f, _, a, b)| {
            [
                TriangleMarker::new((f, a.clamp(lo, hi)), 5, PAIR_COLOUR.filled()),
                TriangleMarker::new((f, b.clamp(lo, hi)), 5, PAIR_COLOUR.filled()),
            ]
        }))
        .map_err(draw_err)?;
    let style = font(12.0)
        .color(&PAIR_COLOUR)
        .pos(Pos::new(HPos::Left, VPos::Center));
    let mut used = Occupied::default();
    for &(f, d, a, b) in pairs {
        let at = (f, (a * b).sqrt().clamp(lo, hi));
        let (x, y) = chart.backend_coord(&at);
        let text = format!("pair, {} Hz apart", crate::base::units::sig(d, 2));
        let w = 7 * text.len() as i32;
        if used.claim((x + 6, y - 7, x + 6 + w, y + 7)) {
            // Anchored at the pair in chart coordinates (the backend
            // pixel is not the panel's own: drawn on the panel it
            // landed below it), 6 px to the right.
            chart
                .draw_series(std::iter::once(
                    EmptyElement::at(at) + Text::new(text, (6, 0), style.clone()),
                ))
                .map_err(draw_err)?;
        }
    }
    Ok(())
}
