//! The spectrum picture's layout and colours, how each kind of mode line
//! is drawn, and the bookkeeping that keeps labels from overlapping.

use plotters::chart::MeshStyle;
use plotters::coord::ranged1d::Ranged;
use plotters::coord::types::RangedCoordf64;
use plotters::prelude::*;

use crate::report::plot::font;

use super::model::PlotLine;

/// Height of the title and subtitle strip, in pixels.
pub(super) const HEADER_PX: u32 = 78;
/// Fraction of the picture below the header given to the spectrum panel.
pub(super) const SPECTRUM_PANEL_FRACTION: f64 = 0.58;
/// Fraction of what remains below the spectrum given to the residuals
/// (the rest shows the decay per partial).
pub(super) const RESIDUAL_PANEL_FRACTION: f64 = 0.5;
/// Colour of the split-pair marks in the decay panel.
pub(super) const PAIR_COLOUR: RGBColor = RGBColor(96, 62, 170);
/// Width reserved for the level / residual tick labels and axis name, in
/// pixels. Equal in both panels so their x axes line up.
pub(super) const Y_LABEL_AREA_PX: u32 = 84;
/// Right margin of both panels, in pixels.
pub(super) const RIGHT_MARGIN_PX: u32 = 28;
/// Left margin of both panels, in pixels.
pub(super) const LEFT_MARGIN_PX: u32 = 8;
/// Rows of staggered mode labels above the spectrum panel.
pub(super) const LABEL_ROWS: usize = 3;
/// Height of one row of mode labels, in pixels.
pub(super) const LABEL_ROW_PX: i32 = 17;
/// Size of the hum triangles, in pixels; their centres sit this far above the axis.
pub(super) const HUM_MARK_PX: f64 = 6.0;
/// Horizontal gap kept free between neighbouring mode labels, in pixels.
pub(super) const LABEL_GAP_PX: i32 = 4;

// Colours: a dark ink for the measurement, a green family for everything
// that matched, a warm family for what did not, magenta for hum.
pub(super) const INK: RGBColor = RGBColor(34, 34, 34);
pub(super) const SPECTRUM_COLOUR: RGBColor = RGBColor(22, 52, 128);
pub(super) const FLOOR_COLOUR: RGBColor = RGBColor(150, 150, 150);
pub(super) const MATCHED_LINE_COLOUR: RGBColor = RGBColor(46, 160, 96);
pub(super) const MATCHED_MARK_COLOUR: RGBColor = RGBColor(12, 110, 58);
pub(super) const UNMATCHED_LINE_COLOUR: RGBColor = RGBColor(242, 160, 70);
pub(super) const UNMATCHED_LABEL_COLOUR: RGBColor = RGBColor(186, 104, 20);
pub(super) const WEAK_LABEL_COLOUR: RGBColor = RGBColor(175, 175, 175);
pub(super) const UNMATCHED_MARK_COLOUR: RGBColor = RGBColor(206, 38, 38);
pub(super) const HUM_COLOUR: RGBColor = RGBColor(190, 30, 170);
pub(super) const GRID_BOLD_COLOUR: RGBColor = RGBColor(222, 222, 222);
pub(super) const GRID_LIGHT_COLOUR: RGBColor = RGBColor(242, 242, 242);
pub(super) const GUIDE_COLOUR: RGBColor = RGBColor(160, 160, 160);

/// Keeps labels from overlapping: remembers the pixel rectangles already used.
#[derive(Default)]
pub(super) struct Occupied {
    /// (left, top, right, bottom) in backend pixels.
    rects: Vec<(i32, i32, i32, i32)>,
}

impl Occupied {
    /// Claims `rect` if it overlaps no claimed rectangle; returns whether it did.
    pub(super) fn claim(&mut self, rect: (i32, i32, i32, i32)) -> bool {
        let (l, t, r, b) = rect;
        let clash = self
            .rects
            .iter()
            .any(|&(l2, t2, r2, b2)| l < r2 && l2 < r && t < b2 && t2 < b);
        if !clash {
            self.rects.push(rect);
        }
        !clash
    }
}

/// How a mode line is drawn, from most to least important.
#[derive(Clone, Copy, PartialEq, Eq, PartialOrd, Ord)]
pub(super) enum LineKind {
    Matched,
    Unmatched,
    Weak,
}

impl LineKind {
    pub(super) fn of(line: &PlotLine) -> Self {
        if line.matched {
            LineKind::Matched
        } else if line.expected_weak {
            LineKind::Weak
        } else {
            LineKind::Unmatched
        }
    }

    pub(super) fn line_style(self) -> ShapeStyle {
        match self {
            LineKind::Matched => MATCHED_LINE_COLOUR.mix(0.5).stroke_width(2),
            LineKind::Unmatched => UNMATCHED_LINE_COLOUR.mix(0.75).stroke_width(1),
            LineKind::Weak => UNMATCHED_LINE_COLOUR.mix(0.22).stroke_width(1),
        }
    }

    pub(super) fn label_colour(self) -> RGBColor {
        match self {
            LineKind::Matched => MATCHED_MARK_COLOUR,
            LineKind::Unmatched => UNMATCHED_LABEL_COLOUR,
            LineKind::Weak => WEAK_LABEL_COLOUR,
        }
    }

    pub(super) fn legend_text(self) -> &'static str {
        match self {
            LineKind::Matched => "predicted mode, matched",
            LineKind::Unmatched => "predicted mode, no partial",
            LineKind::Weak => "predicted mode, expected weak",
        }
    }
}

/// A frequency tick label: whole hertz.
fn whole_hz(v: &f64) -> String {
    format!("{v:.0}")
}

/// What every panel's mesh shares: 14 frequency ticks in whole hertz, the
/// fonts, the grid and the axis colour.
pub(super) fn panel_mesh<'a, 'b, 'm, Y: Ranged>(
    mesh: &'m mut MeshStyle<'a, 'b, RangedCoordf64, Y, BitMapBackend<'a>>,
) -> &'m mut MeshStyle<'a, 'b, RangedCoordf64, Y, BitMapBackend<'a>> {
    mesh.x_labels(14)
        .x_label_formatter(&whole_hz)
        .label_style(font(14.0).color(&INK))
        .axis_desc_style(font(16.0).color(&INK))
        .bold_line_style(GRID_BOLD_COLOUR)
        .light_line_style(GRID_LIGHT_COLOUR)
        .axis_style(RGBColor(120, 120, 120))
}
