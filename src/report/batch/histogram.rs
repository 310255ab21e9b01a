//! The histogram pictures (tension, anisotropy, unevenness): equal bins
//! with an edge on the limits, marks labelled above the plot, values
//! beyond the view counted at its edges.

use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

use crate::acceptance::stats;
use crate::report::plot::{draw_err, draw_rule, font, picture};

use super::chart_style::*;

/// Fewest and most histogram bins; in between, about √n.
pub(super) const MIN_BINS: usize = 8;

pub(super) const MAX_BINS: usize = 40;

/// Histogram bins: about √n, between [`MIN_BINS`] and [`MAX_BINS`].
pub(super) fn bin_count(n: usize) -> usize {
    ((n as f64).sqrt().ceil() as usize).clamp(MIN_BINS, MAX_BINS)
}

/// What one histogram picture shows.
pub(super) struct HistogramPicture<'a> {
    pub(super) title: String,
    pub(super) subtitle: String,
    pub(super) x_label: &'a str,
    pub(super) values: Vec<f64>,
    pub(super) view: (f64, f64),
    /// Vertical marks: (value, label, colour, dashed).
    pub(super) marks: Vec<Mark>,
    /// (a value that must fall on a bin edge, the span that must hold a
    /// whole number of bins): the limits, so no bar straddles a limit.
    pub(super) anchor: (f64, f64),
    /// About how many bins the view should hold.
    pub(super) bin_count: usize,
    /// Decimals of the value axis labels.
    pub(super) x_digits: usize,
}

/// Equal bins covering `view`, one edge at `anchor.0` and a whole number
/// of bins (at least one) in the span `anchor.1`, about `wanted` bins in
/// the view.
pub(super) fn bin_edges(view: (f64, f64), anchor: (f64, f64), wanted: usize) -> Vec<f64> {
    let (lo, hi) = view;
    let (origin, span) = anchor;
    let per_span = ((span / (hi - lo)) * wanted as f64).round().max(1.0);
    let w = span / per_span;
    let first = origin + ((lo - origin) / w).floor() * w;
    let n = ((hi - first) / w).ceil().max(1.0) as usize;
    (0..=n).map(|i| first + w * i as f64).collect()
}

pub(super) fn histogram_png(h: &HistogramPicture<'_>) -> std::result::Result<Vec<u8>, String> {
    picture(PICTURE_WIDTH_PX, HISTOGRAM_HEIGHT_PX, |root| {
        let (header, body) = root.split_vertically(HEADER_PX);
        draw_header(&header, PICTURE_WIDTH_PX, &h.title, &h.subtitle)?;
        let (lo, hi) = h.view;
        let edges = bin_edges(h.view, h.anchor, h.bin_count);
        let hist = stats::histogram_with_edges(&h.values, &edges);
        let below = h.values.iter().filter(|&&v| v < lo).count();
        let above = h.values.iter().filter(|&&v| v > hi).count();
        let top = hist.counts.iter().copied().max().unwrap_or(0).max(1);
        let y_hi = (top as f64 * 1.18).ceil().max(top as f64 + 1.0);
        let (lo, hi) = (edges[0].min(lo), edges[edges.len() - 1].max(hi));
        let mut chart = ChartBuilder::on(&body)
            .margin_left(10)
            .margin_right(30)
            .margin_bottom(8)
            .margin_top(34)
            .x_label_area_size(52)
            .y_label_area_size(70)
            .build_cartesian_2d(lo..hi, 0.0..y_hi)
            .map_err(draw_err)?;
        chart
            .configure_mesh()
            .disable_x_mesh()
            .light_line_style(WHITE)
            .bold_line_style(GRID)
            .axis_style(SOFT_INK)
            .x_desc(h.x_label)
            .y_desc("recordings")
            .x_label_style(font(15.0).color(&INK))
            .y_label_style(font(15.0).color(&INK))
            .axis_desc_style(font(16.0).color(&INK))
            .y_label_formatter(&|v| {
                if (v - v.round()).abs() < 1e-9 {
                    format!("{v:.0}")
                } else {
                    String::new()
                }
            })
            .x_labels(10)
            .x_label_formatter(&|v| format!("{v:.*}", h.x_digits))
            .draw()
            .map_err(draw_err)?;
        for (i, &c) in hist.counts.iter().enumerate() {
            if c == 0 {
                continue;
            }
            let (x0, x1) = (edges[i], edges[i + 1]);
            chart
                .draw_series(std::iter::once(Rectangle::new(
                    [(x0, 0.0), (x1, c as f64)],
                    BAR.mix(0.85).filled(),
                )))
                .map_err(draw_err)?;
            chart
                .draw_series(std::iter::once(Rectangle::new(
                    [(x0, 0.0), (x1, c as f64)],
                    BAR_EDGE.stroke_width(1),
                )))
                .map_err(draw_err)?;
        }
        // Marks, each labelled at the top; labels alternate in two rows
        // so that close marks (nominal near the mean) stay readable.
        for (k, (x, label, colour, dashed)) in h.marks.iter().enumerate() {
            if !(lo..=hi).contains(x) {
                continue;
            }
            let style = colour.stroke_width(2);
            draw_rule(&mut chart, (*x, 0.0), (*x, y_hi), style, *dashed)?;
            // Pixel coordinates from the plot are absolute: draw on the root.
            let (px, _) = chart.backend_coord(&(*x, y_hi));
            let row = (k % 2) as i32;
            root.draw(&Text::new(
                label.clone(),
                (px, HEADER_PX as i32 + 2 + 16 * row),
                font(14.0)
                    .color(colour)
                    .pos(Pos::new(HPos::Center, VPos::Top)),
            ))
            .map_err(draw_err)?;
        }
        let edge_note = |n: usize, side: &str| {
            format!(
                "{n} {} {side} the view",
                if n == 1 { "value" } else { "values" }
            )
        };
        if below > 0 {
            chart
                .draw_series(std::iter::once(Text::new(
                    format!("◀ {}", edge_note(below, "below")),
                    (lo + 0.01 * (hi - lo), y_hi * 0.93),
                    font(14.0).color(&LIMIT),
                )))
                .map_err(draw_err)?;
        }
        if above > 0 {
            chart
                .draw_series(std::iter::once(Text::new(
                    format!("{} ▶", edge_note(above, "above")),
                    (hi - 0.01 * (hi - lo), y_hi * 0.93),
                    font(14.0)
                        .color(&LIMIT)
                        .pos(Pos::new(HPos::Right, VPos::Top)),
                )))
                .map_err(draw_err)?;
        }
        Ok(())
    })
}
