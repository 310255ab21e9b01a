//! The spectrum panel: measured spectrum, noise floor, predicted mode
//! lines with their labels, picked partials, hum marks and the legend.

use plotters::coord::types::RangedCoordf64;
use plotters::element::DashedPathElement;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

use crate::report::plot::{draw_err, font, Area};

use super::model::{column_max, level_range, PlotLine, PlotPartial, SpectrumPlot};
use super::style::*;

/// The chart of the spectrum panel: frequency in Hz against level in dB.
type Chart<'a, 'b> =
    ChartContext<'a, BitMapBackend<'b>, Cartesian2d<RangedCoordf64, RangedCoordf64>>;

/// The spectrum panel: axes, mode lines, floor and spectrum, partials and
/// hum, the mode labels above it and the legend.
pub(super) fn draw_spectrum_panel<'b>(
    root: &Area<'b>,
    area: &Area<'b>,
    plot: &SpectrumPlot,
) -> Result<(), String> {
    let x_max = plot.max_frequency_hz;
    let (y_lo, y_hi) = level_range(plot);
    let lane_px = LABEL_ROWS as u32 * LABEL_ROW_PX as u32 + 8;
    let mut chart = ChartBuilder::on(area)
        .margin_top(lane_px)
        .margin_left(LEFT_MARGIN_PX)
        .margin_right(RIGHT_MARGIN_PX)
        .x_label_area_size(30)
        .y_label_area_size(Y_LABEL_AREA_PX)
        .build_cartesian_2d(0.0..x_max, y_lo..y_hi)
        .map_err(draw_err)?;
    let y_fmt = |v: &f64| format!("{v:.0}");
    panel_mesh(&mut chart.configure_mesh())
        .y_labels(10)
        .y_label_formatter(&y_fmt)
        .y_desc("level (dB re full-scale sine)")
        .draw()
        .map_err(draw_err)?;
    draw_mode_lines(&mut chart, plot, (y_lo, y_hi))?;
    draw_measured(&mut chart, plot, (y_lo, y_hi))?;
    draw_partials(&mut chart, plot, (y_lo, y_hi))?;
    draw_mode_labels(root, &chart, plot, y_hi)?;

    chart
        .configure_series_labels()
        .position(SeriesLabelPosition::UpperRight)
        .margin(12)
        .legend_area_size(30)
        .label_font(font(14.0).color(&INK))
        .background_style(WHITE.mix(0.8))
        .border_style(RGBColor(190, 190, 190))
        .draw()
        .map_err(draw_err)?;
    Ok(())
}

/// The predicted mode lines, behind everything else, faintest first.
fn draw_mode_lines(
    chart: &mut Chart<'_, '_>,
    plot: &SpectrumPlot,
    (y_lo, y_hi): (f64, f64),
) -> Result<(), String> {
    let in_view = |f: f64| f.is_finite() && f > 0.0 && f <= plot.max_frequency_hz;
    for kind in [LineKind::Weak, LineKind::Unmatched, LineKind::Matched] {
        let style = kind.line_style();
        let xs: Vec<f64> = plot
            .lines
            .iter()
            .filter(|l| LineKind::of(l) == kind && in_view(l.frequency_hz))
            .map(|l| l.frequency_hz)
            .collect();
        if xs.is_empty() {
            continue;
        }
        chart
            .draw_series(
                xs.iter()
                    .map(|&f| PathElement::new(vec![(f, y_lo), (f, y_hi)], style)),
            )
            .map_err(draw_err)?
            .label(kind.legend_text())
            .legend(move |(x, y)| {
                // The faintest style would be invisible as a 14 px legend tick.
                let shown = if kind == LineKind::Weak {
                    UNMATCHED_LINE_COLOUR.mix(0.4).stroke_width(1)
                } else {
                    style
                };
                PathElement::new(vec![(x + 10, y - 7), (x + 10, y + 7)], shown)
            });
    }

    Ok(())
}

/// The noise floor (dashed) and the measured spectrum, each reduced to its
/// maximum in every pixel column.
fn draw_measured(
    chart: &mut Chart<'_, '_>,
    plot: &SpectrumPlot,
    (y_lo, y_hi): (f64, f64),
) -> Result<(), String> {
    let x_max = plot.max_frequency_hz;
    let clamp = |v: f64| v.clamp(y_lo, y_hi);
    let columns = chart.plotting_area().dim_in_pixel().0 as usize;
    if !plot.floor_db.is_empty() {
        let floor = column_max(&plot.freqs_hz, &plot.floor_db, 0.0, x_max, columns);
        if !floor.is_empty() {
            let style = FLOOR_COLOUR.stroke_width(2);
            chart
                .draw_series(DashedLineSeries::new(
                    floor.into_iter().map(|(f, v)| (f, clamp(v))),
                    7,
                    5,
                    style,
                ))
                .map_err(draw_err)?
                .label("noise floor")
                .legend(move |(x, y)| {
                    DashedPathElement::new(vec![(x, y), (x + 20, y)], 6, 3, style)
                });
        }
    }
    let spectrum = column_max(&plot.freqs_hz, &plot.level_db, 0.0, x_max, columns);
    if !spectrum.is_empty() {
        let style = SPECTRUM_COLOUR.stroke_width(1);
        chart
            .draw_series(LineSeries::new(
                spectrum.into_iter().map(|(f, v)| (f, clamp(v))),
                style,
            ))
            .map_err(draw_err)?
            .label("measured spectrum")
            .legend(move |(x, y)| {
                PathElement::new(vec![(x, y), (x + 20, y)], style.stroke_width(2))
            });
    }
    Ok(())
}

/// The picked partials (matched and unmatched) and the hum marks.
fn draw_partials(
    chart: &mut Chart<'_, '_>,
    plot: &SpectrumPlot,
    (y_lo, y_hi): (f64, f64),
) -> Result<(), String> {
    let in_view = |f: f64| f.is_finite() && f > 0.0 && f <= plot.max_frequency_hz;
    // Partials: only those inside the axes, so no marker spills into the margins.
    let visible = |p: &&PlotPartial| in_view(p.frequency_hz) && (y_lo..=y_hi).contains(&p.level_db);
    let matched: Vec<&PlotPartial> = plot
        .partials
        .iter()
        .filter(visible)
        .filter(|p| p.matched)
        .collect();
    let unmatched: Vec<&PlotPartial> = plot
        .partials
        .iter()
        .filter(visible)
        .filter(|p| !p.matched)
        .collect();
    if !matched.is_empty() {
        let style = MATCHED_MARK_COLOUR.filled();
        chart
            .draw_series(
                matched
                    .iter()
                    .map(|p| Circle::new((p.frequency_hz, p.level_db), 4, style)),
            )
            .map_err(draw_err)?
            .label("partial, matched")
            .legend(move |(x, y)| Circle::new((x + 10, y), 4, style));
    }
    if !unmatched.is_empty() {
        let style = UNMATCHED_MARK_COLOUR.stroke_width(2);
        chart
            .draw_series(
                unmatched
                    .iter()
                    .map(|p| Cross::new((p.frequency_hz, p.level_db), 5, style)),
            )
            .map_err(draw_err)?
            .label("partial, unmatched")
            .legend(move |(x, y)| Cross::new((x + 10, y), 5, style));
    }

    // Hum markers stand on the bottom axis, out of the way of the spectrum.
    let hum: Vec<f64> = plot
        .hum_hz
        .iter()
        .copied()
        .filter(|&f| in_view(f))
        .collect();
    if !hum.is_empty() {
        let style = HUM_COLOUR.filled();
        let plot_height_px = f64::from(chart.plotting_area().dim_in_pixel().1.max(1));
        let y = y_lo + HUM_MARK_PX * (y_hi - y_lo) / plot_height_px;
        chart
            .draw_series(
                hum.iter()
                    .map(|&f| TriangleMarker::new((f, y), HUM_MARK_PX as i32, style)),
            )
            .map_err(draw_err)?
            .label("mains hum (set aside)")
            .legend(move |(x, y)| TriangleMarker::new((x + 10, y), HUM_MARK_PX as i32, style));
    }
    Ok(())
}

/// Writes the "(m,n)" labels in staggered rows above the spectrum panel,
/// each joined to its line by a short leader. Matched lines are placed
/// first, then unmatched, then expected-weak ones; a label that fits in no
/// row without overlapping another is left out.
pub(super) fn draw_mode_labels<'b>(
    root: &Area<'b>,
    chart: &ChartContext<'_, BitMapBackend<'b>, Cartesian2d<RangedCoordf64, RangedCoordf64>>,
    plot: &SpectrumPlot,
    y_hi: f64,
) -> Result<(), String> {
    let (x_px, y_px) = chart.plotting_area().get_pixel_range();
    let plot_top = y_px.start;
    let mut order: Vec<&PlotLine> = plot
        .lines
        .iter()
        .filter(|l| {
            l.frequency_hz.is_finite()
                && l.frequency_hz > 0.0
                && l.frequency_hz <= plot.max_frequency_hz
                && !l.label.is_empty()
        })
        .collect();
    order.sort_by(|a, b| {
        LineKind::of(a)
            .cmp(&LineKind::of(b))
            .then(a.frequency_hz.total_cmp(&b.frequency_hz))
    });
    let label_font = font(13.0);
    let mut used = Occupied::default();
    for line in order {
        let kind = LineKind::of(line);
        let x = chart.backend_coord(&(line.frequency_hz, y_hi)).0;
        let (w, _) = root
            .estimate_text_size(&line.label, &TextStyle::from(label_font.clone()))
            .map_err(draw_err)?;
        let half = w as i32 / 2 + LABEL_GAP_PX / 2;
        // Keep labels inside the picture at the plot's left and right ends.
        let centre = x.clamp(x_px.start + half, x_px.end - half);
        let placed = (0..LABEL_ROWS).find_map(|row| {
            let bottom = plot_top - 3 - row as i32 * LABEL_ROW_PX;
            let rect = (centre - half, bottom - LABEL_ROW_PX, centre + half, bottom);
            used.claim(rect).then_some(bottom)
        });
        let Some(bottom) = placed else { continue };
        let leader = kind.line_style().stroke_width(1);
        root.draw(&PathElement::new(
            vec![(x, bottom - 1), (x, plot_top)],
            leader,
        ))
        .map_err(draw_err)?;
        let style = label_font
            .clone()
            .color(&kind.label_colour())
            .pos(Pos::new(HPos::Center, VPos::Bottom));
        root.draw(&Text::new(line.label.as_str(), (centre, bottom - 2), style))
            .map_err(draw_err)?;
    }
    Ok(())
}
