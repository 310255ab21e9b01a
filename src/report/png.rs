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

use std::path::{Path, PathBuf};
use std::sync::OnceLock;

use plotters::coord::types::RangedCoordf64;
use plotters::coord::Shift;
use plotters::element::DashedPathElement;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

use crate::base::error::TonusError;

/// Everything the spectrum picture shows.
pub struct SpectrumPlot {
    /// First line of the header, e.g. "panel-a.wav — rectangle 400×300 mm".
    pub title: String,
    /// Second line of the header, e.g.
    /// "T = 2513 ± 9 N/m · rms residual 1.8 cents · quality: sound".
    pub subtitle: String,
    /// Spectrum bin frequencies in Hz. May hold ~100k bins; they are reduced
    /// to one point per pixel column (the column maximum) for drawing.
    pub freqs_hz: Vec<f64>,
    /// Measured spectrum in dB re full-scale sine, one value per bin.
    pub level_db: Vec<f64>,
    /// Noise floor in dB re full-scale sine, one value per bin, or empty to
    /// draw no floor.
    pub floor_db: Vec<f64>,
    /// Picked peaks.
    pub partials: Vec<PlotPartial>,
    /// Predicted mode lines.
    pub lines: Vec<PlotLine>,
    /// Frequencies in Hz of the lines set aside as mains hum.
    pub hum_hz: Vec<f64>,
    /// Right edge of the x axis, in Hz.
    pub max_frequency_hz: f64,
}

/// One picked peak.
pub struct PlotPartial {
    /// Peak frequency in Hz.
    pub frequency_hz: f64,
    /// Peak level in dB re full-scale sine.
    pub level_db: f64,
    /// Whether the peak was assigned to a mode line.
    pub matched: bool,
    /// T60 in seconds, when measured.
    pub t60_s: Option<f64>,
    /// A split pair in the peak: (splitting in Hz, T60 of the lower and
    /// of the upper member in s).
    pub pair: Option<(f64, f64, f64)>,
}

/// One predicted mode line.
pub struct PlotLine {
    /// Predicted frequency in Hz.
    pub frequency_hz: f64,
    /// Mode label, e.g. "(1,2)".
    pub label: String,
    /// Whether a partial was assigned to this line.
    pub matched: bool,
    /// Residual of the assigned partial in cents, when matched.
    pub residual_cents: Option<f64>,
    /// Whether the line is expected to be weak at the tap and pickup
    /// positions (drawn very faintly when unmatched).
    pub expected_weak: bool,
}

/// Width of the picture in pixels.
pub const WIDTH_PX: u32 = 1400;
/// Height of the picture in pixels.
pub const HEIGHT_PX: u32 = 900;

/// Family name under which the bundled font is registered with plotters.
pub const FONT_FAMILY: &str = "sans";

/// The bundled font (DejaVu Sans, licence in `assets/fonts/DejaVu-LICENSE.txt`).
static FONT_BYTES: &[u8] = include_bytes!("../../assets/fonts/DejaVuSans.ttf");

/// Span of the level axis below the highest level, in dB. 80 dB shows the
/// weakest partials worth fitting without squashing the strong ones.
pub const LEVEL_SPAN_DB: f64 = 80.0;
/// Space above the highest level, in dB, so the top peak does not touch the frame.
pub const LEVEL_HEADROOM_DB: f64 = 5.0;
/// Space below the lowest noise-floor value, in dB, so the floor line stays
/// visible above the axis when it sets the bottom of the level axis.
pub const FLOOR_MARGIN_DB: f64 = 5.0;
/// Smallest half-range of the residual axis, in cents.
pub const MIN_RESIDUAL_RANGE_CENTS: f64 = 10.0;
/// Position of the dashed guide lines in the residual panel, in ± cents.
pub const RESIDUAL_GUIDE_CENTS: f64 = 5.0;

/// Height of the title and subtitle strip, in pixels.
const HEADER_PX: u32 = 78;
/// Fraction of the picture below the header given to the spectrum panel.
const SPECTRUM_PANEL_FRACTION: f64 = 0.58;
/// Fraction of what remains below the spectrum given to the residuals
/// (the rest shows the decay per partial).
const RESIDUAL_PANEL_FRACTION: f64 = 0.5;
/// Colour of the split-pair marks in the decay panel.
const PAIR_COLOUR: RGBColor = RGBColor(96, 62, 170);
/// Width reserved for the level / residual tick labels and axis name, in
/// pixels. Equal in both panels so their x axes line up.
const Y_LABEL_AREA_PX: u32 = 84;
/// Right margin of both panels, in pixels.
const RIGHT_MARGIN_PX: u32 = 28;
/// Left margin of both panels, in pixels.
const LEFT_MARGIN_PX: u32 = 8;
/// Rows of staggered mode labels above the spectrum panel.
const LABEL_ROWS: usize = 3;
/// Height of one row of mode labels, in pixels.
const LABEL_ROW_PX: i32 = 17;
/// Size of the hum triangles, in pixels; their centres sit this far above the axis.
const HUM_MARK_PX: f64 = 6.0;
/// Horizontal gap kept free between neighbouring mode labels, in pixels.
const LABEL_GAP_PX: i32 = 4;

// Colours: a dark ink for the measurement, a green family for everything
// that matched, a warm family for what did not, magenta for hum.
const INK: RGBColor = RGBColor(34, 34, 34);
const SPECTRUM_COLOUR: RGBColor = RGBColor(22, 52, 128);
const FLOOR_COLOUR: RGBColor = RGBColor(150, 150, 150);
const MATCHED_LINE_COLOUR: RGBColor = RGBColor(46, 160, 96);
const MATCHED_MARK_COLOUR: RGBColor = RGBColor(12, 110, 58);
const UNMATCHED_LINE_COLOUR: RGBColor = RGBColor(242, 160, 70);
const UNMATCHED_LABEL_COLOUR: RGBColor = RGBColor(186, 104, 20);
const WEAK_LABEL_COLOUR: RGBColor = RGBColor(175, 175, 175);
const UNMATCHED_MARK_COLOUR: RGBColor = RGBColor(206, 38, 38);
const HUM_COLOUR: RGBColor = RGBColor(190, 30, 170);
const GRID_BOLD_COLOUR: RGBColor = RGBColor(222, 222, 222);
const GRID_LIGHT_COLOUR: RGBColor = RGBColor(242, 242, 242);
const GUIDE_COLOUR: RGBColor = RGBColor(160, 160, 160);

/// Draws `plot` and writes it as a PNG to `path`.
///
/// The picture goes to `path` + ".part" first and is renamed into place, so
/// an existing file at `path` is either replaced whole or left untouched; on
/// any error the temporary file is removed.
///
/// # Errors
/// [`TonusError::Write`] when the plot data are inconsistent (level or floor
/// arrays of a different length than the frequencies, a right edge that is
/// not a positive frequency), when drawing fails, or when the file cannot be
/// written or renamed.
pub fn write_png(path: &Path, plot: &SpectrumPlot) -> Result<(), TonusError> {
    let fail = |reason: String| TonusError::Write {
        path: path.to_path_buf(),
        reason,
    };
    validate(plot).map_err(fail)?;
    let rgb = render_rgb(plot).map_err(fail)?;

    let tmp: PathBuf = crate::base::files::temp_path(path);
    let written = encode_png(&tmp, &rgb).and_then(|()| {
        std::fs::rename(&tmp, path)
            .map_err(|e| format!("renaming {} into place: {e}", tmp.display()))
    });
    if let Err(reason) = written {
        // Best effort: the temporary file may not exist if the write failed early.
        let _ = std::fs::remove_file(&tmp);
        return Err(fail(reason));
    }
    Ok(())
}

/// Writes `rgb` (row-major, 3 bytes a pixel, [`WIDTH_PX`]×[`HEIGHT_PX`]) to
/// `file` as an 8-bit RGB PNG.
fn encode_png(file: &Path, rgb: &[u8]) -> Result<(), String> {
    use std::io::Write as _;

    let io_err = |e: std::io::Error| format!("writing {}: {e}", file.display());
    let png_err = |e: ::png::EncodingError| format!("encoding {} as PNG: {e}", file.display());
    let mut out = std::io::BufWriter::new(std::fs::File::create(file).map_err(io_err)?);
    let mut encoder = ::png::Encoder::new(&mut out, WIDTH_PX, HEIGHT_PX);
    encoder.set_color(::png::ColorType::Rgb);
    encoder.set_depth(::png::BitDepth::Eight);
    let mut writer = encoder.write_header().map_err(png_err)?;
    writer.write_image_data(rgb).map_err(png_err)?;
    // `finish` writes IEND and reports its errors, which dropping would swallow.
    writer.finish().map_err(png_err)?;
    out.flush().map_err(io_err)
}

/// Checks what the drawing code relies on, with a message naming the field.
fn validate(plot: &SpectrumPlot) -> Result<(), String> {
    if !(plot.max_frequency_hz.is_finite() && plot.max_frequency_hz > 0.0) {
        return Err(format!(
            "plot right edge max_frequency_hz = {} Hz; expected a positive finite frequency",
            plot.max_frequency_hz
        ));
    }
    if plot.level_db.len() != plot.freqs_hz.len() {
        return Err(format!(
            "spectrum has {} levels for {} frequencies; expected one level per bin",
            plot.level_db.len(),
            plot.freqs_hz.len()
        ));
    }
    if !plot.floor_db.is_empty() && plot.floor_db.len() != plot.freqs_hz.len() {
        return Err(format!(
            "noise floor has {} values for {} frequencies; expected one per bin or none",
            plot.floor_db.len(),
            plot.freqs_hz.len()
        ));
    }
    Ok(())
}

/// Registers the bundled font with plotters once per process.
fn ensure_font() -> Result<(), String> {
    static REGISTERED: OnceLock<bool> = OnceLock::new();
    let ok = *REGISTERED.get_or_init(|| {
        plotters::style::register_font(FONT_FAMILY, FontStyle::Normal, FONT_BYTES).is_ok()
    });
    if ok {
        Ok(())
    } else {
        Err("the bundled font assets/fonts/DejaVuSans.ttf could not be loaded".to_string())
    }
}

/// Turns a plotters error into the reason carried by [`TonusError::Write`].
fn draw_err<E: std::fmt::Display>(e: E) -> String {
    format!("drawing the spectrum picture failed: {e}")
}

/// A font of the bundled family at `size_px`.
fn font(size_px: f64) -> FontDesc<'static> {
    (FONT_FAMILY, size_px).into_font()
}

/// For each of `columns` equal-width columns spanning `[x_min, x_max]`, the
/// bin with the highest finite value, as `(frequency, value)`, in column
/// order. Bins outside the span and non-finite values are ignored; empty
/// columns give no point. Keeping the maximum (not the mean or a sample)
/// means a peak narrower than a column is drawn at its full height.
fn column_max(
    freqs: &[f64],
    values: &[f64],
    x_min: f64,
    x_max: f64,
    columns: usize,
) -> Vec<(f64, f64)> {
    let width = x_max - x_min;
    if columns == 0 || !width.is_finite() || width <= 0.0 {
        return Vec::new();
    }
    let mut best: Vec<Option<(f64, f64)>> = vec![None; columns];
    for (&f, &v) in freqs.iter().zip(values) {
        if !(f.is_finite() && v.is_finite()) || f < x_min || f > x_max {
            continue;
        }
        // The right edge itself belongs to the last column.
        let col = (((f - x_min) / width * columns as f64) as usize).min(columns - 1);
        match best[col] {
            Some((_, b)) if b >= v => {}
            _ => best[col] = Some((f, v)),
        }
    }
    best.into_iter().flatten().collect()
}

/// Bottom and top of the level axis in dB: from the higher of
/// (highest level − [`LEVEL_SPAN_DB`]) and (lowest floor − [`FLOOR_MARGIN_DB`])
/// to the highest level + [`LEVEL_HEADROOM_DB`]. Only bins inside the x range
/// count, so a loud bin off the right edge does not squash the picture.
fn level_range(plot: &SpectrumPlot) -> (f64, f64) {
    let in_view = |f: f64| f.is_finite() && (0.0..=plot.max_frequency_hz).contains(&f);
    let finite_max = |it: &mut dyn Iterator<Item = f64>| {
        it.filter(|v| v.is_finite())
            .fold(None, |m: Option<f64>, v| Some(m.map_or(v, |m| m.max(v))))
    };
    let spectrum_max = finite_max(
        &mut plot
            .freqs_hz
            .iter()
            .zip(&plot.level_db)
            .filter(|(f, _)| in_view(**f))
            .map(|(_, v)| *v),
    );
    let partial_max = finite_max(
        &mut plot
            .partials
            .iter()
            .filter(|p| in_view(p.frequency_hz))
            .map(|p| p.level_db),
    );
    let top_level = match (spectrum_max, partial_max) {
        (Some(a), Some(b)) => a.max(b),
        (Some(a), None) | (None, Some(a)) => a,
        // Nothing to show: a plain full-scale axis.
        (None, None) => 0.0,
    };
    let floor_min = plot
        .freqs_hz
        .iter()
        .zip(&plot.floor_db)
        .filter(|(f, v)| in_view(**f) && v.is_finite())
        .map(|(_, v)| *v)
        .fold(f64::INFINITY, f64::min);
    let mut bottom = top_level - LEVEL_SPAN_DB;
    if floor_min.is_finite() {
        bottom = bottom.max(floor_min - FLOOR_MARGIN_DB);
    }
    let top = top_level + LEVEL_HEADROOM_DB;
    // A floor above the spectrum would leave no room; keep at least 20 dB.
    (bottom.min(top - 20.0), top)
}

/// Half-range of the residual axis in cents: the largest |residual| plus 15 %,
/// rounded up to a multiple of 5, and at least [`MIN_RESIDUAL_RANGE_CENTS`].
fn residual_range(lines: &[PlotLine]) -> f64 {
    let largest = lines
        .iter()
        .filter(|l| l.matched)
        .filter_map(|l| l.residual_cents)
        .filter(|r| r.is_finite())
        .fold(0.0_f64, |m, r| m.max(r.abs()));
    ((largest * 1.15 / 5.0).ceil() * 5.0).max(MIN_RESIDUAL_RANGE_CENTS)
}

/// Keeps labels from overlapping: remembers the pixel rectangles already used.
#[derive(Default)]
struct Occupied {
    /// (left, top, right, bottom) in backend pixels.
    rects: Vec<(i32, i32, i32, i32)>,
}

impl Occupied {
    /// Claims `rect` if it overlaps no claimed rectangle; returns whether it did.
    fn claim(&mut self, rect: (i32, i32, i32, i32)) -> bool {
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
enum LineKind {
    Matched,
    Unmatched,
    Weak,
}

impl LineKind {
    fn of(line: &PlotLine) -> Self {
        if line.matched {
            LineKind::Matched
        } else if line.expected_weak {
            LineKind::Weak
        } else {
            LineKind::Unmatched
        }
    }

    fn line_style(self) -> ShapeStyle {
        match self {
            LineKind::Matched => MATCHED_LINE_COLOUR.mix(0.5).stroke_width(2),
            LineKind::Unmatched => UNMATCHED_LINE_COLOUR.mix(0.75).stroke_width(1),
            LineKind::Weak => UNMATCHED_LINE_COLOUR.mix(0.22).stroke_width(1),
        }
    }

    fn label_colour(self) -> RGBColor {
        match self {
            LineKind::Matched => MATCHED_MARK_COLOUR,
            LineKind::Unmatched => UNMATCHED_LABEL_COLOUR,
            LineKind::Weak => WEAK_LABEL_COLOUR,
        }
    }

    fn legend_text(self) -> &'static str {
        match self {
            LineKind::Matched => "predicted mode, matched",
            LineKind::Unmatched => "predicted mode, no partial",
            LineKind::Weak => "predicted mode, expected weak",
        }
    }
}

/// Draws the whole picture into an RGB buffer (row-major, 3 bytes a pixel).
fn render_rgb(plot: &SpectrumPlot) -> Result<Vec<u8>, String> {
    ensure_font()?;
    let mut buf = vec![0u8; WIDTH_PX as usize * HEIGHT_PX as usize * 3];
    {
        let root = BitMapBackend::with_buffer(&mut buf, (WIDTH_PX, HEIGHT_PX)).into_drawing_area();
        root.fill(&WHITE).map_err(draw_err)?;
        let (header, body) = root.split_vertically(HEADER_PX);
        draw_header(&header, plot)?;
        let spectrum_px = (f64::from(HEIGHT_PX - HEADER_PX) * SPECTRUM_PANEL_FRACTION) as u32;
        let (top, bottom) = body.split_vertically(spectrum_px);
        let residual_px =
            (f64::from(HEIGHT_PX - HEADER_PX - spectrum_px) * RESIDUAL_PANEL_FRACTION) as u32;
        let (middle, lowest) = bottom.split_vertically(residual_px);
        draw_spectrum_panel(&root, &top, plot)?;
        draw_residual_panel(&middle, plot)?;
        draw_decay_panel(&lowest, plot)?;
        root.present().map_err(draw_err)?;
    }
    Ok(buf)
}

type Area<'a> = DrawingArea<BitMapBackend<'a>, Shift>;

fn draw_header(area: &Area<'_>, plot: &SpectrumPlot) -> Result<(), String> {
    let centre = (WIDTH_PX / 2) as i32;
    let top_style = font(27.0)
        .color(&INK)
        .pos(Pos::new(HPos::Center, VPos::Top));
    area.draw(&Text::new(plot.title.as_str(), (centre, 12), top_style))
        .map_err(draw_err)?;
    let sub_style = font(18.0)
        .color(&RGBColor(70, 70, 70))
        .pos(Pos::new(HPos::Center, VPos::Top));
    area.draw(&Text::new(plot.subtitle.as_str(), (centre, 48), sub_style))
        .map_err(draw_err)?;
    Ok(())
}

fn draw_spectrum_panel<'b>(
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
    let x_fmt = |v: &f64| format!("{v:.0}");
    let y_fmt = |v: &f64| format!("{v:.0}");
    chart
        .configure_mesh()
        .x_labels(14)
        .y_labels(10)
        .x_label_formatter(&x_fmt)
        .y_label_formatter(&y_fmt)
        .y_desc("level (dB re full-scale sine)")
        .label_style(font(14.0).color(&INK))
        .axis_desc_style(font(16.0).color(&INK))
        .bold_line_style(GRID_BOLD_COLOUR)
        .light_line_style(GRID_LIGHT_COLOUR)
        .axis_style(RGBColor(120, 120, 120))
        .draw()
        .map_err(draw_err)?;

    let in_view = |f: f64| f.is_finite() && f > 0.0 && f <= x_max;
    let clamp = |v: f64| v.clamp(y_lo, y_hi);

    // Mode lines behind everything else, faintest first.
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

/// Writes the "(m,n)" labels in staggered rows above the spectrum panel,
/// each joined to its line by a short leader. Matched lines are placed
/// first, then unmatched, then expected-weak ones; a label that fits in no
/// row without overlapping another is left out.
fn draw_mode_labels<'b>(
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

/// T60 of every partial on a log axis, at the spectrum's frequencies;
/// a split pair shows both members joined by a bar and its splitting.
fn draw_decay_panel(area: &Area<'_>, plot: &SpectrumPlot) -> Result<(), String> {
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
    let x_fmt = |v: &f64| format!("{v:.0}");
    let y_fmt = |v: &f64| crate::base::units::sig(*v, 2);
    chart
        .configure_mesh()
        .x_labels(14)
        .y_labels(8)
        .x_label_formatter(&x_fmt)
        .y_label_formatter(&y_fmt)
        .x_desc("frequency (Hz)")
        .y_desc("T60 (s)")
        .label_style(font(14.0).color(&INK))
        .axis_desc_style(font(16.0).color(&INK))
        .bold_line_style(GRID_BOLD_COLOUR)
        .light_line_style(GRID_LIGHT_COLOUR)
        .axis_style(RGBColor(120, 120, 120))
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
    if !pairs.is_empty() {
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
        for &(f, d, a, b) in &pairs {
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
    }
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

fn draw_residual_panel(area: &Area<'_>, plot: &SpectrumPlot) -> Result<(), String> {
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
    let x_fmt = |v: &f64| format!("{v:.0}");
    // Whole cents; zero unsigned so the axis reads -5, 0, +5.
    let y_fmt = |v: &f64| {
        if v.abs() < 0.5 {
            "0".to_string()
        } else {
            format!("{v:+.0}")
        }
    };
    chart
        .configure_mesh()
        .x_labels(14)
        .y_labels(9)
        .x_label_formatter(&x_fmt)
        .y_label_formatter(&y_fmt)
        .x_desc("frequency (Hz)")
        .y_desc("residual (cents)")
        .label_style(font(14.0).color(&INK))
        .axis_desc_style(font(16.0).color(&INK))
        .bold_line_style(GRID_BOLD_COLOUR)
        .light_line_style(GRID_LIGHT_COLOUR)
        .axis_style(RGBColor(120, 120, 120))
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

    // Mode labels beside the points, right of the point if free, else left.
    let label_font = font(12.0);
    let mut used = Occupied::default();
    for &(f, r, _) in &points {
        let (x, y) = chart.backend_coord(&(f, r));
        used.claim((x - 5, y - 5, x + 5, y + 5));
    }
    let area_px = chart.plotting_area().get_pixel_range();
    for &(f, r, label) in &points {
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

#[cfg(test)]
mod tests {
    use super::*;

    /// Small deterministic generator (64-bit LCG, Knuth's MMIX constants) for
    /// reproducible noise without a dependency.
    struct Lcg(u64);
    impl Lcg {
        fn uniform(&mut self) -> f64 {
            self.0 = self
                .0
                .wrapping_mul(6_364_136_223_846_793_005)
                .wrapping_add(1_442_695_040_888_963_407);
            (self.0 >> 11) as f64 / (1u64 << 53) as f64
        }
    }

    /// Power of a Lorentzian line of peak power `peak` (linear), centre `f0`
    /// and half width at half maximum `gamma`, at frequency `f` (all Hz).
    fn lorentzian(f: f64, f0: f64, gamma: f64, peak: f64) -> f64 {
        let u = (f - f0) / gamma;
        peak / (1.0 + u * u)
    }

    /// A plausible picture: rectangle 400×300 mm, wave speed 50 m/s, so
    /// f_mn = (c/2)·√((m/Lx)² + (n/Ly)²) (Morse & Ingard, Theoretical
    /// Acoustics, ch. 5); every mode up to 600 Hz is a predicted line, the
    /// first ones are matched by Lorentzian peaks over a -90 dB floor with
    /// noise, plus two stray peaks and 50 Hz hum.
    fn synthetic_plot(bins: usize) -> SpectrumPlot {
        let (lx, ly, c, max_f) = (0.400, 0.300, 50.0, 600.0);
        let mut rng = Lcg(0x5EED);
        let mut modes: Vec<(f64, u32, u32)> = Vec::new();
        for m in 1..12 {
            for n in 1..12 {
                let f = c / 2.0 * ((m as f64 / lx).powi(2) + (n as f64 / ly).powi(2)).sqrt();
                if f <= max_f {
                    modes.push((f, m, n));
                }
            }
        }
        modes.sort_by(|a, b| a.0.total_cmp(&b.0));
        let mut lines = Vec::new();
        let mut peaks: Vec<(f64, f64)> = Vec::new(); // (frequency Hz, peak power)
        let mut partials = Vec::new();
        for (k, &(f, m, n)) in modes.iter().enumerate() {
            let weak = m % 2 == 0 && n % 2 == 0;
            let matched = k < 14 && !weak;
            let residual =
                matched.then(|| 6.0 * (rng.uniform() - 0.5) + if k == 3 { 7.0 } else { 0.0 });
            if let Some(r) = residual {
                let f_meas = f * 2f64.powf(r / 1200.0);
                let level_db = -12.0 - 2.5 * k as f64;
                peaks.push((f_meas, 10f64.powf(level_db / 10.0)));
                partials.push(PlotPartial {
                    frequency_hz: f_meas,
                    level_db,
                    matched: true,
                    t60_s: Some(1.2 * (modes[0].0 / f).sqrt()),
                    pair: (k == 2).then_some((
                        0.4,
                        1.1 * (modes[0].0 / f).sqrt(),
                        0.9 * (modes[0].0 / f).sqrt(),
                    )),
                });
            }
            lines.push(PlotLine {
                frequency_hz: f,
                label: format!("({m},{n})"),
                matched,
                residual_cents: residual,
                expected_weak: weak,
            });
        }
        for (f, level_db) in [(333.0, -48.0), (471.5, -55.0)] {
            peaks.push((f, 10f64.powf(level_db / 10.0)));
            partials.push(PlotPartial {
                frequency_hz: f,
                level_db,
                matched: false,
                t60_s: Some(0.3),
                pair: None,
            });
        }
        for f in [50.0, 150.0] {
            peaks.push((f, 10f64.powf(-62.0 / 10.0)));
        }
        let df = 2000.0 / bins as f64;
        let freqs_hz: Vec<f64> = (0..bins).map(|i| i as f64 * df).collect();
        let floor_power = 10f64.powf(-90.0 / 10.0);
        let level_db = freqs_hz
            .iter()
            .map(|&f| {
                // Exponentially distributed noise power: the periodogram of white noise.
                let noise = -floor_power * (1.0 - rng.uniform()).ln();
                let p: f64 = peaks
                    .iter()
                    .map(|&(f0, a)| lorentzian(f, f0, 0.05, a))
                    .sum();
                10.0 * (noise + p).log10()
            })
            .collect();
        SpectrumPlot {
            title: "panel-a.wav — rectangle 400×300 mm".into(),
            subtitle: "T = 2513 ± 9 N/m · rms residual 1.8 cents · quality: sound".into(),
            floor_db: vec![-90.0; bins],
            freqs_hz,
            level_db,
            partials,
            lines,
            hum_hz: vec![50.0, 150.0],
            max_frequency_hz: max_f,
        }
    }

    /// Checks the PNG signature (PNG spec, 5.2), then returns width and
    /// height from the IHDR chunk as read by the `png` decoder, after
    /// checking it is 8-bit RGB.
    fn png_size(bytes: &[u8]) -> (u32, u32) {
        assert!(bytes.len() > 8, "file too short for a PNG signature");
        assert_eq!(
            &bytes[..8],
            &[0x89, b'P', b'N', b'G', 0x0D, 0x0A, 0x1A, 0x0A]
        );
        let reader = ::png::Decoder::new(bytes)
            .read_info()
            .expect("PNG header decodes");
        let info = reader.info();
        assert_eq!(info.color_type, ::png::ColorType::Rgb);
        assert_eq!(info.bit_depth, ::png::BitDepth::Eight);
        (info.width, info.height)
    }

    #[test]
    fn writes_png_of_the_right_size_and_leaves_no_part_file() {
        let dir = tempfile::tempdir().expect("temp dir");
        let path = dir.path().join("spectrum.png");
        write_png(&path, &synthetic_plot(100_000)).expect("png written");
        let bytes = std::fs::read(&path).expect("png readable");
        assert_eq!(png_size(&bytes), (WIDTH_PX, HEIGHT_PX));
        assert_eq!(&bytes[bytes.len() - 8..bytes.len() - 4], b"IEND");
        assert!(!crate::base::files::temp_path(&path).exists());
        let names: Vec<_> = std::fs::read_dir(dir.path())
            .expect("list dir")
            .map(|e| e.expect("entry").file_name())
            .collect();
        assert_eq!(names, vec![std::ffi::OsString::from("spectrum.png")]);
    }

    #[test]
    fn empty_plot_still_renders() {
        // Nothing fitted: no bins, no lines, no partials. The picture must
        // still be written (axes, header, "no matched mode lines").
        let dir = tempfile::tempdir().expect("temp dir");
        let path = dir.path().join("empty.png");
        let plot = SpectrumPlot {
            title: "empty".into(),
            subtitle: String::new(),
            freqs_hz: Vec::new(),
            level_db: Vec::new(),
            floor_db: Vec::new(),
            partials: Vec::new(),
            lines: Vec::new(),
            hum_hz: Vec::new(),
            max_frequency_hz: 1000.0,
        };
        write_png(&path, &plot).expect("png written");
        let bytes = std::fs::read(&path).expect("png readable");
        assert_eq!(png_size(&bytes), (WIDTH_PX, HEIGHT_PX));
    }

    #[test]
    fn unwritable_path_is_a_write_error_without_part_file() {
        let dir = tempfile::tempdir().expect("temp dir");
        let path = dir.path().join("missing-dir").join("spectrum.png");
        let err = write_png(&path, &synthetic_plot(2_000)).expect_err("must fail");
        assert!(
            matches!(err, TonusError::Write { path: ref p, .. } if p == &path),
            "{err}"
        );
        assert!(!crate::base::files::temp_path(&path).exists());
    }

    #[test]
    fn inconsistent_plot_data_is_a_write_error() {
        let dir = tempfile::tempdir().expect("temp dir");
        let path = dir.path().join("spectrum.png");
        let mut plot = synthetic_plot(2_000);
        plot.level_db.pop();
        let err = write_png(&path, &plot).expect_err("length mismatch");
        assert!(
            err.to_string().contains("1999 levels for 2000 frequencies"),
            "{err}"
        );
        let mut plot = synthetic_plot(2_000);
        plot.max_frequency_hz = f64::NAN;
        assert!(write_png(&path, &plot).is_err());
        assert!(!path.exists());
    }

    #[test]
    fn column_max_keeps_a_one_bin_peak() {
        // 100k bins over 0..20 kHz at -90 dB, one bin at -10 dB: far more
        // bins than the 1000 columns, so averaging or sampling would lose it.
        let n = 100_000;
        let freqs: Vec<f64> = (0..n).map(|i| i as f64 * 0.2).collect();
        let mut values = vec![-90.0; n];
        values[43_211] = -10.0;
        let out = column_max(&freqs, &values, 0.0, 20_000.0, 1000);
        assert!(out.len() <= 1000);
        // Exact equality: the values are copied, not computed.
        assert!(out.iter().any(|&(f, v)| v == -10.0 && f == freqs[43_211]));
        assert!(out.windows(2).all(|w| w[0].0 < w[1].0));
    }

    #[test]
    fn column_max_matches_a_brute_force_reference() {
        let mut rng = Lcg(7);
        let freqs: Vec<f64> = (0..5_000).map(|i| i as f64 * 0.37).collect();
        let values: Vec<f64> = freqs.iter().map(|_| -100.0 * rng.uniform()).collect();
        let (lo, hi, cols) = (100.0, 1500.0, 97);
        let out = column_max(&freqs, &values, lo, hi, cols);
        let mut expected = Vec::new();
        for c in 0..cols {
            // The obvious way: scan every bin for each column.
            let in_col = |f: f64| {
                let k = ((f - lo) / (hi - lo) * cols as f64) as usize;
                f >= lo && f <= hi && k.min(cols - 1) == c
            };
            let best = freqs.iter().zip(&values).filter(|(f, _)| in_col(**f)).fold(
                None,
                |b: Option<(f64, f64)>, (&f, &v)| match b {
                    Some((_, bv)) if bv >= v => b,
                    _ => Some((f, v)),
                },
            );
            expected.extend(best);
        }
        assert_eq!(out, expected);
    }

    #[test]
    fn level_axis_follows_the_floor_or_the_span() {
        let mut plot = synthetic_plot(4_000);
        let (lo, hi) = level_range(&plot);
        // Highest peak is the first matched partial at -12 dB; the floor at
        // -90 dB minus the 5 dB margin is below -12 - 80, so the span wins.
        let tol = 1e-9; // the bounds are sums of the inputs, exact to rounding
        assert!((hi - (-12.0 + LEVEL_HEADROOM_DB)).abs() < tol, "{hi}");
        assert!((lo - (-12.0 - LEVEL_SPAN_DB)).abs() < tol, "{lo}");
        plot.floor_db = vec![-70.0; plot.freqs_hz.len()];
        let (lo, _) = level_range(&plot);
        assert!((lo - (-70.0 - FLOOR_MARGIN_DB)).abs() < tol, "{lo}");
    }

    #[test]
    fn residual_axis_is_symmetric_and_at_least_ten_cents() {
        let line = |r: f64| PlotLine {
            frequency_hz: 100.0,
            label: "(1,1)".into(),
            matched: true,
            residual_cents: Some(r),
            expected_weak: false,
        };
        assert_eq!(
            residual_range(&[line(2.0), line(-3.0)]),
            MIN_RESIDUAL_RANGE_CENTS
        );
        // 17 cents · 1.15 = 19.55, rounded up to 20.
        assert_eq!(residual_range(&[line(-17.0)]), 20.0);
    }
}
