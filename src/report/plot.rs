//! The plotting core shared by every picture (`png`'s spectrum picture,
//! `batch`'s histograms and run chart): the bundled font, registered once
//! and included once in the binary; drawing into a white RGB buffer in
//! memory; and PNG encoding.
//!
//! The picture is drawn into memory and encoded with the `png` crate; the
//! bitmap backend's own file output is not used because it picks the image
//! format from the file extension, and outputs are written to a temporary
//! name ending in `.part` first.

use std::sync::OnceLock;

use plotters::coord::Shift;
use plotters::element::DashedPathElement;
use plotters::prelude::*;

/// Family name under which the bundled font is registered with plotters.
pub const FONT_FAMILY: &str = "sans";

/// The bundled font (DejaVu Sans, licence in `assets/fonts/DejaVu-LICENSE.txt`).
static FONT_BYTES: &[u8] = include_bytes!("../../assets/fonts/DejaVuSans.ttf");

/// A drawing area of an in-memory bitmap.
pub type Area<'a> = DrawingArea<BitMapBackend<'a>, Shift>;

/// Registers the bundled font with plotters once per process.
///
/// # Errors
/// A message when the font cannot be loaded.
pub fn ensure_font() -> Result<(), String> {
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

/// A font of the bundled family at `size_px`.
pub fn font(size_px: f64) -> FontDesc<'static> {
    (FONT_FAMILY, size_px).into_font()
}

/// Turns a plotters error into a reason.
pub fn draw_err<E: std::fmt::Display>(e: E) -> String {
    format!("drawing the picture failed: {e}")
}

/// Draws with `draw` into a white `width`×`height` picture and returns its
/// pixels (row-major, 3 bytes a pixel).
///
/// # Errors
/// The font cannot be loaded, or drawing fails.
pub fn render_rgb(
    width: u32,
    height: u32,
    draw: impl FnOnce(&Area<'_>) -> Result<(), String>,
) -> Result<Vec<u8>, String> {
    ensure_font()?;
    let mut buf = vec![0u8; width as usize * height as usize * 3];
    {
        let root = BitMapBackend::with_buffer(&mut buf, (width, height)).into_drawing_area();
        root.fill(&WHITE).map_err(draw_err)?;
        draw(&root)?;
        root.present().map_err(draw_err)?;
    }
    Ok(buf)
}

/// Encodes an RGB buffer (row-major, 3 bytes a pixel) as an 8-bit PNG.
///
/// # Errors
/// The encoder fails (the buffer does not match the size).
pub fn encode_png(rgb: &[u8], width: u32, height: u32) -> Result<Vec<u8>, String> {
    let mut out = Vec::new();
    {
        let mut encoder = ::png::Encoder::new(&mut out, width, height);
        encoder.set_color(::png::ColorType::Rgb);
        encoder.set_depth(::png::BitDepth::Eight);
        let png_err = |e: ::png::EncodingError| format!("encoding the picture as PNG: {e}");
        let mut writer = encoder.write_header().map_err(png_err)?;
        writer.write_image_data(rgb).map_err(png_err)?;
        // `finish` writes IEND and reports its errors, which dropping would swallow.
        writer.finish().map_err(png_err)?;
    }
    Ok(out)
}

/// Draws with `draw` into a white picture and returns it PNG-encoded.
///
/// # Errors
/// As [`render_rgb`] and [`encode_png`].
pub fn picture(
    width: u32,
    height: u32,
    draw: impl FnOnce(&Area<'_>) -> Result<(), String>,
) -> Result<Vec<u8>, String> {
    encode_png(&render_rgb(width, height, draw)?, width, height)
}

/// Draws a line between two points of `chart`, dashed (8 on, 5 off) or
/// solid.
///
/// # Errors
/// Drawing fails.
pub fn draw_rule<DB, X, Y>(
    chart: &mut ChartContext<'_, DB, Cartesian2d<X, Y>>,
    from: (X::ValueType, Y::ValueType),
    to: (X::ValueType, Y::ValueType),
    style: ShapeStyle,
    dashed: bool,
) -> Result<(), String>
where
    DB: DrawingBackend,
    X: plotters::coord::ranged1d::Ranged,
    Y: plotters::coord::ranged1d::Ranged,
    X::ValueType: Clone + 'static,
    Y::ValueType: Clone + 'static,
{
    if dashed {
        chart
            .draw_series(std::iter::once(DashedPathElement::new(
                vec![from, to],
                8,
                5,
                style,
            )))
            .map_err(draw_err)?;
    } else {
        chart
            .draw_series(LineSeries::new(vec![from, to], style))
            .map_err(draw_err)?;
    }
    Ok(())
}
