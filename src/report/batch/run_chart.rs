//! The run chart: the tension in recording order on an individuals chart
//! (top) with its moving-range chart (bottom).

use plotters::coord::types::RangedCoordf64;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

use crate::acceptance::stats;
use crate::report::plot::{draw_err, draw_rule, font, picture, Area};

use super::chart_style::*;
use super::summary::{BatchEntry, BatchSummary};

/// A chart of the run chart: recording position against N/m.
type Chart<'a, 'b> =
    ChartContext<'a, BitMapBackend<'b>, Cartesian2d<RangedCoordf64, RangedCoordf64>>;

/// Width of the value-axis label area of both charts, pixels.
const Y_AREA_PX: u32 = 80;

/// The individuals chart (top) and the moving-range chart (bottom).
pub(super) fn run_chart_png(
    s: &BatchSummary,
    points: &[(usize, &BatchEntry)],
    chart_stats: &stats::IndividualsChart,
) -> std::result::Result<Vec<u8>, String> {
    picture(PICTURE_WIDTH_PX, RUN_CHART_HEIGHT_PX, |root| {
        let (header, body) = root.split_vertically(HEADER_PX);
        draw_header(
            &header,
            PICTURE_WIDTH_PX,
            &format!("Tension in recording order — {} v{}", s.spec_name, s.spec_version),
            &format!(
                "individuals chart: centre {:.1} N/m, control limits {:.1} … {:.1} N/m (centre ± 3 × mean moving range / 1.128) · {} measured of {}",
                chart_stats.centre,
                chart_stats.lcl,
                chart_stats.ucl,
                points.len(),
                s.entries.len()
            ),
        )?;
        let (top, bottom) =
            body.split_vertically((f64::from(RUN_CHART_HEIGHT_PX - HEADER_PX) * 0.68) as u32);
        let x_end = s.entries.len().max(1) as f64 + 1.0;
        draw_individuals(root, &top, s, points, chart_stats, x_end)?;
        draw_moving_ranges(root, &bottom, points, chart_stats, x_end)
    })
}

/// The individuals chart: limits and control lines, the run, the legend.
fn draw_individuals(
    root: &Area<'_>,
    top: &Area<'_>,
    s: &BatchSummary,
    points: &[(usize, &BatchEntry)],
    chart_stats: &stats::IndividualsChart,
    x_end: f64,
) -> Result<(), String> {
    let values: Vec<f64> = points
        .iter()
        .filter_map(|(_, e)| e.tension_n_per_m)
        .collect();
    let mut view_values = values.clone();
    view_values.push(chart_stats.ucl);
    view_values.push(chart_stats.lcl);
    let (lo, hi) = value_view(&view_values, s.lower_n_per_m, s.upper_n_per_m);
    let mut chart = ChartBuilder::on(top)
        .margin_left(10)
        .margin_right(150)
        .margin_top(14)
        .margin_bottom(4)
        .x_label_area_size(34)
        .y_label_area_size(Y_AREA_PX)
        .build_cartesian_2d(0.0..x_end, lo..hi)
        .map_err(draw_err)?;
    chart
        .configure_mesh()
        .light_line_style(WHITE)
        .bold_line_style(GRID)
        .axis_style(SOFT_INK)
        .y_desc("tension [N/m]")
        .y_label_formatter(&|v| format!("{v:.0}"))
        .x_label_style(font(14.0).color(&INK))
        .y_label_style(font(14.0).color(&INK))
        .axis_desc_style(font(16.0).color(&INK))
        .x_label_formatter(&|v| format!("{v:.0}"))
        .draw()
        .map_err(draw_err)?;
    draw_reference_lines(root, &mut chart, s, chart_stats, (lo, hi), x_end)?;
    draw_run(root, &mut chart, points, chart_stats, (lo, hi))?;
    draw_decision_legend(root, &chart)
}

/// Specification limits, nominal, centre line and control limits, each
/// named at the right end.
fn draw_reference_lines(
    root: &Area<'_>,
    chart: &mut Chart<'_, '_>,
    s: &BatchSummary,
    chart_stats: &stats::IndividualsChart,
    (lo, hi): (f64, f64),
    x_end: f64,
) -> Result<(), String> {
    let labelled: Vec<Mark> = vec![
        solid(s.upper_n_per_m, format!("H {:.0}", s.upper_n_per_m), LIMIT),
        solid(s.lower_n_per_m, format!("L {:.0}", s.lower_n_per_m), LIMIT),
        dashed(
            s.nominal_n_per_m,
            format!("nominal {:.0}", s.nominal_n_per_m),
            NOMINAL,
        ),
        solid(
            chart_stats.centre,
            format!("centre {:.1}", chart_stats.centre),
            CENTRE,
        ),
        dashed(
            chart_stats.ucl,
            format!("UCL {:.1}", chart_stats.ucl),
            CONTROL,
        ),
        dashed(
            chart_stats.lcl,
            format!("LCL {:.1}", chart_stats.lcl),
            CONTROL,
        ),
    ];
    let mut labels: Vec<(i32, i32, (&String, &RGBColor))> = Vec::new();
    for (y, label, colour, dashed) in &labelled {
        if !(lo..=hi).contains(y) {
            continue;
        }
        draw_rule(
            chart,
            (0.0, *y),
            (x_end, *y),
            colour.stroke_width(2),
            *dashed,
        )?;
        let (px, py) = chart.backend_coord(&(x_end, *y));
        labels.push((px, py, (label, colour)));
    }
    for (px, py, (label, colour)) in spread_labels(labels, LABEL_PITCH_PX) {
        root.draw(&Text::new(
            label.clone(),
            (px + 8, py),
            font(14.0)
                .color(colour)
                .pos(Pos::new(HPos::Left, VPos::Center)),
        ))
        .map_err(draw_err)?;
    }
    Ok(())
}

/// The run itself, then each point coloured by its decision;
/// out-of-control points ringed, out-of-view points as triangles at the
/// edge.
fn draw_run(
    root: &Area<'_>,
    chart: &mut Chart<'_, '_>,
    points: &[(usize, &BatchEntry)],
    chart_stats: &stats::IndividualsChart,
    (lo, hi): (f64, f64),
) -> Result<(), String> {
    let clamp = |v: f64| v.clamp(lo, hi);
    chart
        .draw_series(LineSeries::new(
            points
                .iter()
                .filter_map(|(i, e)| e.tension_n_per_m.map(|t| (*i as f64, clamp(t)))),
            SOFT_INK.mix(0.5).stroke_width(1),
        ))
        .map_err(draw_err)?;
    let r = if points.len() > 300 { 2 } else { 4 };
    for (k, (i, e)) in points.iter().enumerate() {
        let Some(t) = e.tension_n_per_m else { continue };
        let c = decision_colour(&e.decision);
        let x = *i as f64;
        if t < lo || t > hi {
            let (px, py) = chart.backend_coord(&(x, clamp(t)));
            let d = if t > hi { 1 } else { -1 };
            root.draw(&Polygon::new(
                vec![(px, py - 7 * d), (px - 6, py + 3 * d), (px + 6, py + 3 * d)],
                c.filled(),
            ))
            .map_err(draw_err)?;
            continue;
        }
        chart
            .draw_series(std::iter::once(Circle::new((x, t), r, c.filled())))
            .map_err(draw_err)?;
        if chart_stats.points[k].out_of_control() {
            chart
                .draw_series(std::iter::once(Circle::new(
                    (x, t),
                    r + 4,
                    INK.stroke_width(2),
                )))
                .map_err(draw_err)?;
        }
    }
    Ok(())
}

/// Legend of the decision colours, top left inside the plot.
fn draw_decision_legend(root: &Area<'_>, chart: &Chart<'_, '_>) -> Result<(), String> {
    let legend = [
        ("pass", PASS_MARK),
        ("indeterminate", INDETERMINATE_MARK),
        ("fail", FAIL_MARK),
        ("ringed: out of control", INK),
    ];
    let x0 = chart.plotting_area().get_pixel_range().0.start;
    let mut lx = x0 + 14;
    for (name, c) in legend {
        if name.starts_with("ringed") {
            root.draw(&Circle::new(
                (lx + 4, HEADER_PX as i32 + 28),
                7,
                c.stroke_width(2),
            ))
            .map_err(draw_err)?;
        } else {
            root.draw(&Circle::new((lx + 4, HEADER_PX as i32 + 28), 5, c.filled()))
                .map_err(draw_err)?;
        }
        root.draw(&Text::new(
            name,
            (lx + 18, HEADER_PX as i32 + 28),
            font(14.0)
                .color(&INK)
                .pos(Pos::new(HPos::Left, VPos::Center)),
        ))
        .map_err(draw_err)?;
        lx += 30 + 8 * name.chars().count() as i32;
    }
    Ok(())
}

/// The moving-range chart with its mean and its upper limit.
fn draw_moving_ranges(
    root: &Area<'_>,
    bottom: &Area<'_>,
    points: &[(usize, &BatchEntry)],
    chart_stats: &stats::IndividualsChart,
    x_end: f64,
) -> Result<(), String> {
    let mr: Vec<(usize, f64)> = points
        .iter()
        .zip(&chart_stats.points)
        .filter_map(|((i, _), p)| p.moving_range.map(|m| (*i, m)))
        .collect();
    let mr_top = mr
        .iter()
        .map(|m| m.1)
        .fold(chart_stats.moving_range_ucl, f64::max)
        .min(3.0 * chart_stats.moving_range_ucl.max(f64::MIN_POSITIVE))
        * 1.12;
    let mr_top = if mr_top > 0.0 { mr_top } else { 1.0 };
    let mut mr_chart = ChartBuilder::on(bottom)
        .margin_left(10)
        .margin_right(150)
        .margin_top(8)
        .margin_bottom(6)
        .x_label_area_size(48)
        .y_label_area_size(Y_AREA_PX)
        .build_cartesian_2d(0.0..x_end, 0.0..mr_top)
        .map_err(draw_err)?;
    mr_chart
        .configure_mesh()
        .light_line_style(WHITE)
        .bold_line_style(GRID)
        .axis_style(SOFT_INK)
        .x_desc("recording (batch order)")
        .y_desc("moving range [N/m]")
        .y_label_formatter(&|v| format!("{v:.0}"))
        .x_label_style(font(14.0).color(&INK))
        .y_label_style(font(14.0).color(&INK))
        .axis_desc_style(font(16.0).color(&INK))
        .x_label_formatter(&|v| format!("{v:.0}"))
        .y_labels(5)
        .draw()
        .map_err(draw_err)?;
    mr_chart
        .draw_series(LineSeries::new(
            mr.iter().map(|&(i, m)| (i as f64, m.min(mr_top))),
            BAR_EDGE.stroke_width(1),
        ))
        .map_err(draw_err)?;
    mr_chart
        .draw_series(mr.iter().map(|&(i, m)| {
            Circle::new(
                (i as f64, m.min(mr_top)),
                if mr.len() > 300 { 1 } else { 3 },
                BAR_EDGE.filled(),
            )
        }))
        .map_err(draw_err)?;
    let mr_lines = [
        solid(
            chart_stats.average_moving_range,
            format!("mean MR {:.1}", chart_stats.average_moving_range),
            CENTRE,
        ),
        dashed(
            chart_stats.moving_range_ucl,
            format!("MR limit {:.1}", chart_stats.moving_range_ucl),
            CONTROL,
        ),
    ];
    for (y, label, colour, dashed) in mr_lines {
        if y > mr_top {
            continue;
        }
        draw_rule(
            &mut mr_chart,
            (0.0, y),
            (x_end, y),
            colour.stroke_width(2),
            dashed,
        )?;
        let (px, py) = mr_chart.backend_coord(&(x_end, y));
        root.draw(&Text::new(
            label,
            (px + 8, py),
            font(14.0)
                .color(&colour)
                .pos(Pos::new(HPos::Left, VPos::Center)),
        ))
        .map_err(draw_err)?;
    }
    Ok(())
}
