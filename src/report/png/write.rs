//! Drawing the whole spectrum picture and writing it atomically.

use std::path::{Path, PathBuf};

use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

use crate::base::error::TonusError;
use crate::report::plot::{self, draw_err, font, Area};

use super::decay_panel::draw_decay_panel;
use super::model::{validate, SpectrumPlot, HEIGHT_PX, WIDTH_PX};
use super::residual_panel::draw_residual_panel;
use super::spectrum_panel::draw_spectrum_panel;
use super::style::{HEADER_PX, INK, RESIDUAL_PANEL_FRACTION, SPECTRUM_PANEL_FRACTION};

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

    let png = plot::encode_png(&rgb, WIDTH_PX, HEIGHT_PX).map_err(fail)?;

    let tmp: PathBuf = crate::base::files::temp_path(path);
    let written = std::fs::write(&tmp, &png)
        .map_err(|e| format!("writing {}: {e}", tmp.display()))
        .and_then(|()| {
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

/// Draws the whole picture into an RGB buffer (row-major, 3 bytes a pixel).
pub(super) fn render_rgb(plot: &SpectrumPlot) -> Result<Vec<u8>, String> {
    plot::render_rgb(WIDTH_PX, HEIGHT_PX, |root| {
        let (header, body) = root.split_vertically(HEADER_PX);
        draw_header(&header, plot)?;
        let spectrum_px = (f64::from(HEIGHT_PX - HEADER_PX) * SPECTRUM_PANEL_FRACTION) as u32;
        let (top, bottom) = body.split_vertically(spectrum_px);
        let residual_px =
            (f64::from(HEIGHT_PX - HEADER_PX - spectrum_px) * RESIDUAL_PANEL_FRACTION) as u32;
        let (middle, lowest) = bottom.split_vertically(residual_px);
        draw_spectrum_panel(root, &top, plot)?;
        draw_residual_panel(&middle, plot)?;
        draw_decay_panel(&lowest, plot)
    })
}

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
