//! The data of the spectrum picture ([`SpectrumPlot`]), its size and
//! axis constants, and the pure computations behind the axes: the check of
//! the data, the column maximum and the level and residual ranges.

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

/// Checks what the drawing code relies on, with a message naming the field.
pub(super) fn validate(plot: &SpectrumPlot) -> Result<(), String> {
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

/// For each of `columns` equal-width columns spanning `[x_min, x_max]`, the
/// bin with the highest finite value, as `(frequency, value)`, in column
/// order. Bins outside the span and non-finite values are ignored; empty
/// columns give no point. Keeping the maximum (not the mean or a sample)
/// means a peak narrower than a column is drawn at its full height.
pub(super) fn column_max(
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
pub(super) fn level_range(plot: &SpectrumPlot) -> (f64, f64) {
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
pub(super) fn residual_range(lines: &[PlotLine]) -> f64 {
    let largest = lines
        .iter()
        .filter(|l| l.matched)
        .filter_map(|l| l.residual_cents)
        .filter(|r| r.is_finite())
        .fold(0.0_f64, |m, r| m.max(r.abs()));
    ((largest * 1.15 / 5.0).ceil() * 5.0).max(MIN_RESIDUAL_RANGE_CENTS)
}
