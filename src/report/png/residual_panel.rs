//! The residual panel: each matched mode's residual in cents, as a stem
//! from zero with its label.

use plotters::coord::types::RangedCoordf64;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

use crate::report::plot::{draw_err, font, Area};

use super::model::{residual_range, SpectrumPlot, RESIDUAL_GUIDE_CENTS};
use super::style::*;

pub(super) fn draw_residual_panel(area: &Area<'_>, plot: &SpectrumPlot) -> Result<(), String> {
    let x_max = plot.max_frequency_hz;
    let half = residual_range(&plot.lines);
    let mut chart = ChartBuilder::on(area)
        .margin_top(14)
        .margin_bottom(10)
        .margin_left(LEFT_MARGIN_PX)
        .margin_right(RIGHT_MARGIN_PX)
        .x_label_area_size(46)
        .y_label_area_size(Y_LABEL_AREA_PX)
        .build_cartesian_2d(0.0..x_max, -half..half)
        .map_err(draw_err)?;
    // Whole cents; zero unsigned so the axis reads -5, 0, +5.
    let y_fmt = |v: &f64| {
        if v.abs() < 0.5 {
            "0".to_string()
        } else {
            format!("{v:+.0}")
        }
    };
    panel_mesh(&mut chart.configure_mesh())
        .y_labels(9)
        .y_label_formatter(&y_fmt)
        .x_desc("frequency (Hz)")
        .y_desc("residual (cents)")
        .draw()
        .map_err(draw_err)?;

    chart
        .draw_series(LineSeries::new(
            vec![(0.0, 0.0), (x_max, 0.0)],
            INK.stroke_width(1),
        ))
        .map_err(draw_err)?;
    for guide in [-RESIDUAL_GUIDE_CENTS, RESIDUAL_GUIDE_CENTS] {
        chart
            .draw_series(DashedLineSeries::new(
                vec![(0.0, guide), (x_max, guide)],
                8,
                6,
                GUIDE_COLOUR.stroke_width(1),
            ))
            .map_err(draw_err)?;
    }

    let points: Vec<(f64, f64, &str)> = plot
        .lines
        .iter()
        .filter(|l| l.matched && l.frequency_hz.is_finite() && l.frequency_hz <= x_max)
        .filter_map(|l| {
            l.residual_cents
                .filter(|r| r.is_finite())
                .map(|r| (l.frequency_hz, r, l.label.as_str()))
        })
        .collect();
    if points.is_empty() {
        let style = font(16.0)
            .color(&GUIDE_COLOUR)
            .pos(Pos::new(HPos::Center, VPos::Center));
        let (xr, yr) = chart.plotting_area().get_pixel_range();
        let root = chart.plotting_area().strip_coord_spec();
        // Between the zero line and the +5 cent guide (the axis is ±10 cents here).
        let at = ((xr.end - xr.start) / 2, (yr.end - yr.start) * 3 / 8);
        root.draw(&Text::new("no matched mode lines", at, style))
            .map_err(draw_err)?;
        return Ok(());
    }
    // Stems from zero make the sign and size of each residual readable at a glance.
    chart
        .draw_series(points.iter().map(|&(f, r, _)| {
            PathElement::new(
                vec![(f, 0.0), (f, r)],
                MATCHED_LINE_COLOUR.mix(0.6).stroke_width(2),
            )
        }))
        .map_err(draw_err)?;
    chart
        .draw_series(
            points
                .iter()
                .map(|&(f, r, _)| Circle::new((f, r), 4, MATCHED_MARK_COLOUR.filled())),
        )
        .map_err(draw_err)?;

    draw_residual_labels(area, &chart, &points)
}

/// Mode labels beside the residual points: above a positive residual,
/// below a negative one, centred, else right of the point, else left;
/// a label that fits nowhere free is left out.
fn draw_residual_labels(
    area: &Area<'_>,
    chart: &ChartContext<'_, BitMapBackend<'_>, Cartesian2d<RangedCoordf64, RangedCoordf64>>,
    points: &[(f64, f64, &str)],
) -> Result<(), String> {
    let label_font = font(12.0);
    let mut used = Occupied::default();
    for &(f, r, _) in points {
        let (x, y) = chart.backend_coord(&(f, r));
        used.claim((x - 5, y - 5, x + 5, y + 5));
    }
    let area_px = chart.plotting_area().get_pixel_range();
    for &(f, r, label) in points {
        if label.is_empty() {
            continue;
        }
        let (x, y) = chart.backend_coord(&(f, r));
        let (w, h) = area
            .estimate_text_size(label, &TextStyle::from(label_font.clone()))
            .map_err(draw_err)?;
        let (w, h) = (w as i32, h as i32);
        // Above a positive residual, below a negative one: away from the zero line.
        let (top, v_pos) = if r >= 0.0 {
            (y - h - 6, VPos::Top)
        } else {
            (y + 6, VPos::Top)
        };
        let candidates = [
            (x - w / 2, HPos::Left),
            (x + 7, HPos::Left),
            (x - 7 - w, HPos::Left),
        ];
        for (left, h_pos) in candidates {
            let rect = (left - 1, top, left + w + 1, top + h);
            let inside = rect.0 >= area_px.0.start
                && rect.2 <= area_px.0.end
                && rect.1 >= area_px.1.start
                && rect.3 <= area_px.1.end;
            if inside && used.claim(rect) {
                let style = label_font
                    .clone()
                    .color(&MATCHED_MARK_COLOUR)
                    .pos(Pos::new(h_pos, v_pos));
                // The chart area is offset inside `area`; text goes in backend pixels.
                let (ox, oy) = area.get_base_pixel();
                area.draw(&Text::new(label, (left - ox, top - oy), style))
                    .map_err(draw_err)?;
                break;
            }
        }
    }
    Ok(())
}
