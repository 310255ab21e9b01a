//! The batch report of `tonus inspect`: a Markdown page and a
//! self-contained HTML page (pictures embedded as base64 `data:` URIs),
//! with three PNG pictures beside them, and the growing CSV / JSON Lines
//! outputs of a batch ([`Spool`]).
//!
//! # What the report holds
//!
//! - a tally of the decisions and the rule that made them;
//! - the spread of fitted tension (histogram) against the lower and upper
//!   limits and the nominal;
//! - the tension in recording order on an individuals chart with its
//!   moving-range chart: centre x̄, control limits x̄ ± 3·MR̄/d₂
//!   (NIST/SEMATECH e-Handbook of Statistical Methods §6.3.2.2; computed in
//!   [`crate::acceptance::stats`]);
//! - Cp, Cpk (σ̂ = MR̄/d₂) and Pp, Ppk (σ = s), with their formulas
//!   (e-Handbook §6.1.6);
//! - the anisotropy distribution where the model measures it (biaxial),
//!   against ± the specification's limit, with the per-recording
//!   judgements against it;
//! - the unevenness distribution (the spread 2|ε| from resolved split
//!   pairs, circle or square panel) against its limit, and how many
//!   recordings resolved no pair;
//! - when the batch was stopped by a signal, how many recordings of how
//!   many were decided;
//! - the recordings that were not measured, with their reasons;
//! - every recording's decision.
//!
//! # Conventions
//!
//! - Tensions are in N/m, anisotropy in percent, recording positions from
//!   1 in the order the batch was given (the order of `inspect.csv`).
//! - The statistics use the recordings that were measured (pass, fail or
//!   indeterminate); not-measured and unreadable ones are listed apart.
//! - The value axes show the limits and at most one tolerance width
//!   (H − L) beyond them; values further out are counted at the edge
//!   (and drawn as triangles on the run chart) so that one gross outlier
//!   does not flatten the picture.
//! - Pictures are drawn with plotters into memory, with the bundled
//!   DejaVu Sans (registered as [`FONT_FAMILY`]), encoded with the `png`
//!   crate and written atomically like every output.

use std::fmt::Write as _;
use std::io::Write as _;
use std::path::{Path, PathBuf};
use std::sync::OnceLock;

use plotters::coord::Shift;
use plotters::element::DashedPathElement;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

use crate::acceptance::stats;
use crate::base::error::{Result, TonusError};

/// One recording of the batch, as the report needs it.
#[derive(Debug, Clone, Default)]
pub struct BatchEntry {
    /// The recording's path as given.
    pub file: String,
    /// `pass`, `fail`, `indeterminate`, `not_measured` or `error`
    /// (unreadable or unfittable).
    pub decision: String,
    /// Fitted tension, N/m.
    pub tension_n_per_m: Option<f64>,
    /// Its standard uncertainty (fit and areal density), N/m.
    pub tension_u_n_per_m: Option<f64>,
    /// Expanded uncertainty U = k·u, N/m.
    pub expanded_u_n_per_m: Option<f64>,
    /// Signed distance to the nearest limit, N/m (positive inside).
    pub margin_n_per_m: Option<f64>,
    /// `lower` or `upper`.
    pub nearest_limit: Option<String>,
    /// Anisotropy 100·(Tx − Ty)/((Tx + Ty)/2), percent (biaxial model).
    pub anisotropy_percent: Option<f64>,
    /// Its standard uncertainty, percent.
    pub anisotropy_u_percent: Option<f64>,
    /// The anisotropy judgement against the limit (`pass`, `fail`,
    /// `indeterminate`), when the specification limits it.
    pub anisotropy_decision: Option<String>,
    /// Unevenness, the spread 2|ε| from resolved split pairs, percent.
    pub unevenness_percent: Option<f64>,
    /// Its standard uncertainty, percent.
    pub unevenness_u_percent: Option<f64>,
    /// The unevenness judgement against the limit, when limited and
    /// measured.
    pub unevenness_decision: Option<String>,
    /// Quality grade of the fit.
    pub grade: Option<String>,
    /// Why it was not measured, or the error.
    pub reason: Option<String>,
    /// The partial frequencies came from the damped-sinusoid refinement
    /// (false: FFT peaks only, or not measured).
    pub refined: bool,
}

impl BatchEntry {
    /// Measured: decided pass, fail or indeterminate on a tension.
    pub fn measured(&self) -> bool {
        matches!(self.decision.as_str(), "pass" | "fail" | "indeterminate")
            && self.tension_n_per_m.is_some_and(f64::is_finite)
    }
}

/// The batch and the specification it was decided against.
#[derive(Debug, Clone, Default)]
pub struct BatchSummary {
    /// Specification name.
    pub spec_name: String,
    /// Specification version.
    pub spec_version: String,
    /// SHA-256 of the specification file.
    pub spec_sha256: String,
    /// Model used for the fits.
    pub model: String,
    /// Decision rule name (`simple`, `guarded`).
    pub rule: String,
    /// The rule's description and source.
    pub rule_description: String,
    /// Coverage factor k of the expanded uncertainty.
    pub coverage_factor: f64,
    /// Nominal tension, N/m.
    pub nominal_n_per_m: f64,
    /// Lower limit L, N/m.
    pub lower_n_per_m: f64,
    /// Upper limit H, N/m.
    pub upper_n_per_m: f64,
    /// Largest anisotropy allowed, percent, if the specification sets one.
    pub max_anisotropy_percent: Option<f64>,
    /// Largest unevenness (spread 2|ε|) allowed, percent, if set.
    pub max_unevenness_percent: Option<f64>,
    /// The calibration file and its SHA-256, if the specification names
    /// one.
    pub calibration: Option<String>,
    /// Set when a signal stopped the batch before every recording was
    /// decided.
    pub interrupted: Option<Interruption>,
    /// The unevenness from split pairs applies: a circle or a square
    /// panel, measured with a membrane model (isotropic or air).
    pub unevenness_applies: bool,
    /// When the report was made (RFC 3339).
    pub generated: String,
    /// Station name, if given.
    pub station: Option<String>,
    /// Operator name, if given.
    pub operator: Option<String>,
    /// Every recording, in batch order.
    pub entries: Vec<BatchEntry>,
}

/// A batch stopped by a signal.
#[derive(Debug, Clone)]
pub struct Interruption {
    /// The signal's name, e.g. `SIGINT`.
    pub signal: String,
    /// Its number (exit status 128 + this).
    pub signal_number: i32,
    /// Recordings decided before the stop.
    pub decided: usize,
    /// Recordings the batch was given (None for the watch mode).
    pub total: Option<usize>,
}

/// File names of the report, inside the output folder.
pub const MARKDOWN_NAME: &str = "batch-report.md";
/// The self-contained HTML page.
pub const HTML_NAME: &str = "batch-report.html";
/// Histogram of the fitted tension.
pub const HISTOGRAM_NAME: &str = "batch-tension-spread.png";
/// Individuals and moving-range chart.
pub const RUN_CHART_NAME: &str = "batch-tension-run.png";
/// Histogram of the anisotropy.
pub const ANISOTROPY_NAME: &str = "batch-anisotropy.png";
/// Histogram of the unevenness.
pub const UNEVENNESS_NAME: &str = "batch-unevenness.png";

/// Width of every picture, pixels.
pub const PICTURE_WIDTH_PX: u32 = 1200;
/// Height of the histograms, pixels.
pub const HISTOGRAM_HEIGHT_PX: u32 = 560;
/// Height of the run chart (both panels), pixels.
pub const RUN_CHART_HEIGHT_PX: u32 = 760;

/// Family name under which the bundled font is registered for these
/// pictures.
pub const FONT_FAMILY: &str = "tonus-batch-sans";
/// The bundled font (DejaVu Sans, licence in `assets/fonts/DejaVu-LICENSE.txt`).
static FONT_BYTES: &[u8] = include_bytes!("../../assets/fonts/DejaVuSans.ttf");

/// Height of the title strip of every picture, pixels.
const HEADER_PX: u32 = 72;
/// Fewest and most histogram bins; in between, about √n.
const MIN_BINS: usize = 8;
const MAX_BINS: usize = 40;
/// The NIST e-Handbook (§6.1.6) asks for about this many values before a
/// capability index means much; fewer get a note.
const CAPABILITY_MIN_N: usize = 50;

// Colours of our own: slate ink, a steel-blue family for the data, brick
// red for the specification limits, an ochre for the control limits.
const INK: RGBColor = RGBColor(38, 42, 48);
const SOFT_INK: RGBColor = RGBColor(96, 100, 108);
const GRID: RGBColor = RGBColor(232, 234, 238);
const BAR: RGBColor = RGBColor(92, 128, 170);
const BAR_EDGE: RGBColor = RGBColor(52, 80, 116);
const LIMIT: RGBColor = RGBColor(176, 48, 40);
const NOMINAL: RGBColor = RGBColor(120, 120, 120);
const CENTRE: RGBColor = RGBColor(30, 96, 96);
const CONTROL: RGBColor = RGBColor(196, 132, 20);
const PASS_MARK: RGBColor = RGBColor(40, 120, 150);
const FAIL_MARK: RGBColor = RGBColor(176, 48, 40);
const INDETERMINATE_MARK: RGBColor = RGBColor(214, 150, 30);

/// Registers the bundled font once per process.
fn ensure_font() -> std::result::Result<(), String> {
    static REGISTERED: OnceLock<bool> = OnceLock::new();
    let ok = *REGISTERED.get_or_init(|| {
        plotters::style::register_font(FONT_FAMILY, FontStyle::Normal, FONT_BYTES).is_ok()
    });
    if ok {
        Ok(())
    } else {
        Err("the bundled font assets/fonts/DejaVuSans.ttf could not be loaded".into())
    }
}

fn font(size_px: f64) -> FontDesc<'static> {
    (FONT_FAMILY, size_px).into_font()
}

fn draw_err<E: std::fmt::Display>(e: E) -> String {
    format!("drawing the batch picture failed: {e}")
}

type Area<'a> = DrawingArea<BitMapBackend<'a>, Shift>;

/// Base64 (RFC 4648 §4, standard alphabet, with padding).
pub fn base64(bytes: &[u8]) -> String {
    const ALPHABET: &[u8; 64] = b"ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/";
    let mut out = String::with_capacity(bytes.len().div_ceil(3) * 4);
    for chunk in bytes.chunks(3) {
        let b = [
            chunk[0],
            chunk.get(1).copied().unwrap_or(0),
            chunk.get(2).copied().unwrap_or(0),
        ];
        let n = (u32::from(b[0]) << 16) | (u32::from(b[1]) << 8) | u32::from(b[2]);
        let sextet = |shift: u32| char::from(ALPHABET[((n >> shift) & 63) as usize]);
        out.push(sextet(18));
        out.push(sextet(12));
        out.push(if chunk.len() > 1 { sextet(6) } else { '=' });
        out.push(if chunk.len() > 2 { sextet(0) } else { '=' });
    }
    out
}

/// Encodes an RGB buffer (row-major, 3 bytes a pixel) as an 8-bit PNG.
fn encode_png(rgb: &[u8], width: u32, height: u32) -> std::result::Result<Vec<u8>, String> {
    let mut out = Vec::new();
    {
        let mut encoder = ::png::Encoder::new(&mut out, width, height);
        encoder.set_color(::png::ColorType::Rgb);
        encoder.set_depth(::png::BitDepth::Eight);
        let png_err = |e: ::png::EncodingError| format!("encoding the batch picture: {e}");
        let mut writer = encoder.write_header().map_err(png_err)?;
        writer.write_image_data(rgb).map_err(png_err)?;
        writer.finish().map_err(png_err)?;
    }
    Ok(out)
}

/// Draws with `draw` into a white picture and returns it PNG-encoded.
fn picture(
    width: u32,
    height: u32,
    draw: impl FnOnce(&Area<'_>) -> std::result::Result<(), String>,
) -> std::result::Result<Vec<u8>, String> {
    ensure_font()?;
    let mut buf = vec![0u8; width as usize * height as usize * 3];
    {
        let root = BitMapBackend::with_buffer(&mut buf, (width, height)).into_drawing_area();
        root.fill(&WHITE).map_err(draw_err)?;
        draw(&root)?;
        root.present().map_err(draw_err)?;
    }
    encode_png(&buf, width, height)
}

/// Vertical distance kept between two line labels, pixels.
const LABEL_PITCH_PX: i32 = 16;

/// Places labels `(x, y, …)` at their lines' heights, in top-to-bottom
/// order, at least `pitch` apart: overlapping neighbours are pushed apart
/// and each crowded group is centred on its lines.
fn spread_labels<T>(mut labels: Vec<(i32, i32, T)>, pitch: i32) -> Vec<(i32, i32, T)> {
    labels.sort_by_key(|l| l.1);
    let wanted: Vec<i32> = labels.iter().map(|l| l.1).collect();
    let mut start = 0;
    while start < labels.len() {
        // A group: each label would touch the one before it.
        let mut end = start + 1;
        while end < labels.len() && wanted[end] - wanted[end - 1] < pitch {
            end += 1;
        }
        let n = (end - start) as i32;
        let centre = wanted[start..end].iter().sum::<i32>() / n;
        let top = centre - pitch * (n - 1) / 2;
        for (k, l) in labels[start..end].iter_mut().enumerate() {
            l.1 = top + pitch * k as i32;
        }
        start = end;
    }
    labels
}

/// Tensions of the measured recordings with their 1-based positions.
fn measured(s: &BatchSummary) -> Vec<(usize, &BatchEntry)> {
    s.entries
        .iter()
        .enumerate()
        .filter(|(_, e)| e.measured())
        .map(|(i, e)| (i + 1, e))
        .collect()
}

/// The value axis: the limits with a tenth of the tolerance around them,
/// widened to the data but never more than one tolerance beyond a limit.
fn value_view(values: &[f64], lower: f64, upper: f64) -> (f64, f64) {
    let tol = (upper - lower).abs().max(f64::MIN_POSITIVE);
    let (mut lo, mut hi) = (lower.min(upper), lower.max(upper));
    for &v in values.iter().filter(|v| v.is_finite()) {
        lo = lo.min(v.max(lower - tol));
        hi = hi.max(v.min(upper + tol));
    }
    let pad = 0.08 * (hi - lo);
    (lo - pad, hi + pad)
}

/// Histogram bins: about √n, between [`MIN_BINS`] and [`MAX_BINS`].
fn bin_count(n: usize) -> usize {
    ((n as f64).sqrt().ceil() as usize).clamp(MIN_BINS, MAX_BINS)
}

/// What one histogram picture shows.
struct HistogramPicture<'a> {
    title: String,
    subtitle: String,
    x_label: &'a str,
    values: Vec<f64>,
    view: (f64, f64),
    /// Vertical marks: (value, label, colour, dashed).
    marks: Vec<(f64, String, RGBColor, bool)>,
    /// (a value that must fall on a bin edge, the span that must hold a
    /// whole number of bins): the limits, so no bar straddles a limit.
    anchor: (f64, f64),
    /// About how many bins the view should hold.
    bin_count: usize,
    /// Decimals of the value axis labels.
    x_digits: usize,
}

/// Equal bins covering `view`, one edge at `anchor.0` and a whole number
/// of bins (at least one) in the span `anchor.1`, about `wanted` bins in
/// the view.
fn bin_edges(view: (f64, f64), anchor: (f64, f64), wanted: usize) -> Vec<f64> {
    let (lo, hi) = view;
    let (origin, span) = anchor;
    let per_span = ((span / (hi - lo)) * wanted as f64).round().max(1.0);
    let w = span / per_span;
    let first = origin + ((lo - origin) / w).floor() * w;
    let n = ((hi - first) / w).ceil().max(1.0) as usize;
    (0..=n).map(|i| first + w * i as f64).collect()
}

fn draw_header(
    area: &Area<'_>,
    width: u32,
    title: &str,
    subtitle: &str,
) -> std::result::Result<(), String> {
    let centre = (width / 2) as i32;
    area.draw(&Text::new(
        title.to_string(),
        (centre, 10),
        font(24.0)
            .color(&INK)
            .pos(Pos::new(HPos::Center, VPos::Top)),
    ))
    .map_err(draw_err)?;
    area.draw(&Text::new(
        subtitle.to_string(),
        (centre, 42),
        font(16.0)
            .color(&SOFT_INK)
            .pos(Pos::new(HPos::Center, VPos::Top)),
    ))
    .map_err(draw_err)?;
    Ok(())
}

fn histogram_png(h: &HistogramPicture<'_>) -> std::result::Result<Vec<u8>, String> {
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
            if *dashed {
                chart
                    .draw_series(std::iter::once(DashedPathElement::new(
                        vec![(*x, 0.0), (*x, y_hi)],
                        8,
                        5,
                        style,
                    )))
                    .map_err(draw_err)?;
            } else {
                chart
                    .draw_series(LineSeries::new(vec![(*x, 0.0), (*x, y_hi)], style))
                    .map_err(draw_err)?;
            }
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

fn decision_colour(decision: &str) -> RGBColor {
    match decision {
        "pass" => PASS_MARK,
        "fail" => FAIL_MARK,
        _ => INDETERMINATE_MARK,
    }
}

/// The individuals chart (top) and the moving-range chart (bottom).
fn run_chart_png(
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
        let values: Vec<f64> = points
            .iter()
            .filter_map(|(_, e)| e.tension_n_per_m)
            .collect();
        let mut view_values = values.clone();
        view_values.push(chart_stats.ucl);
        view_values.push(chart_stats.lcl);
        let (lo, hi) = value_view(&view_values, s.lower_n_per_m, s.upper_n_per_m);
        let n_total = s.entries.len().max(1);
        let x_range = 0.0..(n_total as f64 + 1.0);
        let y_area = 80;
        let mut chart = ChartBuilder::on(&top)
            .margin_left(10)
            .margin_right(150)
            .margin_top(14)
            .margin_bottom(4)
            .x_label_area_size(34)
            .y_label_area_size(y_area)
            .build_cartesian_2d(x_range.clone(), lo..hi)
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
        let x_end = n_total as f64 + 1.0;
        let hline = |y: f64| vec![(0.0, y), (x_end, y)];
        // Specification limits, nominal, centre line, control limits;
        // each named at the right end.
        let labelled: Vec<(f64, String, RGBColor, bool)> = vec![
            (
                s.upper_n_per_m,
                format!("H {:.0}", s.upper_n_per_m),
                LIMIT,
                false,
            ),
            (
                s.lower_n_per_m,
                format!("L {:.0}", s.lower_n_per_m),
                LIMIT,
                false,
            ),
            (
                s.nominal_n_per_m,
                format!("nominal {:.0}", s.nominal_n_per_m),
                NOMINAL,
                true,
            ),
            (
                chart_stats.centre,
                format!("centre {:.1}", chart_stats.centre),
                CENTRE,
                false,
            ),
            (
                chart_stats.ucl,
                format!("UCL {:.1}", chart_stats.ucl),
                CONTROL,
                true,
            ),
            (
                chart_stats.lcl,
                format!("LCL {:.1}", chart_stats.lcl),
                CONTROL,
                true,
            ),
        ];
        let mut labels: Vec<(i32, i32, (&String, &RGBColor))> = Vec::new();
        for (y, label, colour, dashed) in &labelled {
            if !(lo..=hi).contains(y) {
                continue;
            }
            if *dashed {
                chart
                    .draw_series(std::iter::once(DashedPathElement::new(
                        hline(*y),
                        8,
                        5,
                        colour.stroke_width(2),
                    )))
                    .map_err(draw_err)?;
            } else {
                chart
                    .draw_series(LineSeries::new(hline(*y), colour.stroke_width(2)))
                    .map_err(draw_err)?;
            }
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
        // The run itself, then each point coloured by its decision;
        // out-of-control points ringed, out-of-view points as triangles
        // at the edge.
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
        // Legend of the decision colours, top left inside the plot.
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

        // Moving ranges.
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
        let mut mr_chart = ChartBuilder::on(&bottom)
            .margin_left(10)
            .margin_right(150)
            .margin_top(8)
            .margin_bottom(6)
            .x_label_area_size(48)
            .y_label_area_size(y_area)
            .build_cartesian_2d(x_range, 0.0..mr_top)
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
            (
                chart_stats.average_moving_range,
                format!("mean MR {:.1}", chart_stats.average_moving_range),
                CENTRE,
                false,
            ),
            (
                chart_stats.moving_range_ucl,
                format!("MR limit {:.1}", chart_stats.moving_range_ucl),
                CONTROL,
                true,
            ),
        ];
        for (y, label, colour, dashed) in mr_lines {
            if y > mr_top {
                continue;
            }
            if dashed {
                mr_chart
                    .draw_series(std::iter::once(DashedPathElement::new(
                        vec![(0.0, y), (x_end, y)],
                        8,
                        5,
                        colour.stroke_width(2),
                    )))
                    .map_err(draw_err)?;
            } else {
                mr_chart
                    .draw_series(LineSeries::new(
                        vec![(0.0, y), (x_end, y)],
                        colour.stroke_width(2),
                    ))
                    .map_err(draw_err)?;
            }
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
    })
}

/// Capability figures for the report: (Cp/Cpk with σ̂ = MR̄/d₂, Pp/Ppk
/// with σ = s).
fn capabilities(
    values: &[f64],
    s: &BatchSummary,
) -> (Option<stats::Capability>, Option<stats::Capability>) {
    (
        stats::capability(
            values,
            s.lower_n_per_m,
            s.upper_n_per_m,
            stats::SigmaMethod::MovingRange,
        ),
        stats::capability(
            values,
            s.lower_n_per_m,
            s.upper_n_per_m,
            stats::SigmaMethod::Overall,
        ),
    )
}

fn opt(v: Option<f64>, digits: usize) -> String {
    v.filter(|x| x.is_finite())
        .map(|x| format!("{x:.digits$}"))
        .unwrap_or_else(|| "–".into())
}

/// Counts per decision, in a fixed order.
fn tally(s: &BatchSummary) -> Vec<(&'static str, usize)> {
    ["pass", "indeterminate", "fail", "not_measured", "error"]
        .iter()
        .map(|d| (*d, s.entries.iter().filter(|e| e.decision == *d).count()))
        .collect()
}

fn decision_label(d: &str) -> &str {
    match d {
        "not_measured" => "not measured",
        "error" => "unreadable / error",
        other => other,
    }
}

/// The pictures of a batch: (file name, PNG bytes, alt text).
struct Pictures {
    items: Vec<(&'static str, Vec<u8>, String)>,
}

fn pictures(s: &BatchSummary) -> std::result::Result<Pictures, String> {
    let pts = measured(s);
    let values: Vec<f64> = pts.iter().filter_map(|(_, e)| e.tension_n_per_m).collect();
    let mut items = Vec::new();
    if !values.is_empty() {
        let mean = stats::mean(&values);
        let mut marks = vec![
            (
                s.lower_n_per_m,
                format!("L {:.0} N/m", s.lower_n_per_m),
                LIMIT,
                false,
            ),
            (
                s.upper_n_per_m,
                format!("H {:.0} N/m", s.upper_n_per_m),
                LIMIT,
                false,
            ),
            (
                s.nominal_n_per_m,
                format!("nominal {:.0}", s.nominal_n_per_m),
                NOMINAL,
                true,
            ),
        ];
        if let Some(m) = mean {
            marks.push((m, format!("mean {m:.1}"), CENTRE, true));
        }
        let png = histogram_png(&HistogramPicture {
            title: format!("Fitted tension — {} v{}", s.spec_name, s.spec_version),
            subtitle: format!(
                "{} measured recordings of {} · limits {:.0} … {:.0} N/m · rule {}",
                values.len(),
                s.entries.len(),
                s.lower_n_per_m,
                s.upper_n_per_m,
                s.rule
            ),
            x_label: "tension [N/m]",
            view: value_view(&values, s.lower_n_per_m, s.upper_n_per_m),
            anchor: (s.lower_n_per_m, s.upper_n_per_m - s.lower_n_per_m),
            bin_count: bin_count(values.len()),
            x_digits: 0,
            values: values.clone(),
            marks,
        })?;
        items.push((
            HISTOGRAM_NAME,
            png,
            "Histogram of the fitted tension with the lower and upper limits".to_string(),
        ));
    }
    if let Some(chart) = stats::individuals_chart(&values) {
        let png = run_chart_png(s, &pts, &chart)?;
        items.push((
            RUN_CHART_NAME,
            png,
            "Individuals and moving-range chart of the tension in recording order".to_string(),
        ));
    }
    let aniso: Vec<f64> = s
        .entries
        .iter()
        .filter(|e| e.measured())
        .filter_map(|e| e.anisotropy_percent)
        .filter(|a| a.is_finite())
        .collect();
    if !aniso.is_empty() {
        let amax = aniso.iter().fold(0.0f64, |a, &b| a.max(b.abs()));
        let lim = s.max_anisotropy_percent.unwrap_or(amax.max(1.0));
        // Labels alternate between two rows in this order: the mean sits
        // in the other row from the limits and from 0.
        let mut marks = vec![(0.0, "0 %".to_string(), NOMINAL, true)];
        if let Some(m) = stats::mean(&aniso) {
            marks.push((m, format!("mean {m:.2} %"), CENTRE, true));
        }
        if let Some(m) = s.max_anisotropy_percent {
            marks.push((m, format!("limit +{m} %"), LIMIT, false));
            marks.push((-m, format!("limit −{m} %"), LIMIT, false));
        }
        let png = histogram_png(&HistogramPicture {
            title: format!("Anisotropy — {} v{}", s.spec_name, s.spec_version),
            subtitle: format!(
                "100·(Tx − Ty)/((Tx + Ty)/2) · {} measured recordings{}",
                aniso.len(),
                s.max_anisotropy_percent
                    .map(|m| format!(" · limit |a| ≤ {m} % · rule {}", s.rule))
                    .unwrap_or_default()
            ),
            x_label: "anisotropy [%]",
            view: value_view(&aniso, -lim, lim),
            anchor: (-lim, 2.0 * lim),
            bin_count: bin_count(aniso.len()),
            x_digits: 1,
            values: aniso,
            marks,
        })?;
        items.push((
            ANISOTROPY_NAME,
            png,
            "Histogram of the anisotropy against the limits".to_string(),
        ));
    }
    let uneven: Vec<f64> = s
        .entries
        .iter()
        .filter(|e| e.measured())
        .filter_map(|e| e.unevenness_percent)
        .filter(|a| a.is_finite())
        .collect();
    if !uneven.is_empty() {
        let vmax = uneven.iter().fold(0.0f64, |a, &b| a.max(b));
        let lim = s.max_unevenness_percent.unwrap_or(vmax.max(1.0));
        let mut marks = Vec::new();
        if let Some(m) = s.max_unevenness_percent {
            marks.push((m, format!("limit {m} %"), LIMIT, false));
        }
        if let Some(m) = stats::mean(&uneven) {
            marks.push((m, format!("mean {m:.2} %"), CENTRE, true));
        }
        let png = histogram_png(&HistogramPicture {
            title: format!("Unevenness — {} v{}", s.spec_name, s.spec_version),
            subtitle: format!(
                "spread 2|ε| from resolved split pairs · {} of {} measured recordings{}",
                uneven.len(),
                measured(s).len(),
                s.max_unevenness_percent
                    .map(|m| format!(" · limit {m} % · rule {}", s.rule))
                    .unwrap_or_default()
            ),
            x_label: "unevenness, tightest over slackest direction − 1 [%]",
            // From 0 to the limit or the largest value: the limit is
            // one-sided, so a tolerance "width" says little here.
            view: value_view(&uneven, 0.0, lim.max(vmax)),
            anchor: (0.0, lim),
            bin_count: bin_count(uneven.len()),
            x_digits: 1,
            values: uneven,
            marks,
        })?;
        items.push((
            UNEVENNESS_NAME,
            png,
            "Histogram of the unevenness against the limit".to_string(),
        ));
    }
    Ok(Pictures { items })
}

/// A table row of cells.
fn cells_row(out: &mut String, cells: &[String]) {
    out.push('|');
    for c in cells {
        let _ = write!(out, " {} |", c.replace('|', "\\|"));
    }
    out.push('\n');
}

/// The report's sections, as (heading, Markdown body). The HTML page is
/// made from the same text so the two never disagree.
fn sections(s: &BatchSummary, pics: &Pictures) -> Vec<(String, String)> {
    let mut out = Vec::new();
    let pts = measured(s);
    let values: Vec<f64> = pts.iter().filter_map(|(_, e)| e.tension_n_per_m).collect();
    let has_pic = |name: &str| pics.items.iter().any(|p| p.0 == name);

    // What was decided, by which rule.
    let mut b = String::new();
    if let Some(i) = &s.interrupted {
        let _ = writeln!(
            b,
            "**The run was interrupted by {}**: {}. The report covers the recordings decided before the stop.\n",
            i.signal,
            match i.total {
                Some(t) => format!(
                    "{} of {t} recordings were decided, {} were not",
                    i.decided,
                    t.saturating_sub(i.decided)
                ),
                None => format!(
                    "the watch ended after {} recording(s); files that landed later were not decided",
                    i.decided
                ),
            }
        );
    }
    let _ = writeln!(
        b,
        "Specification **{}** version {} (SHA-256 `{}`), model {}, decided by the **{}** rule: {}",
        s.spec_name,
        s.spec_version,
        short_hash(&s.spec_sha256),
        s.model,
        s.rule,
        s.rule_description
    );
    let _ = writeln!(
        b,
        "\nLimits: L = {:.1} N/m, H = {:.1} N/m, nominal {:.1} N/m; expanded uncertainty with k = {}.{}{}{}",
        s.lower_n_per_m,
        s.upper_n_per_m,
        s.nominal_n_per_m,
        s.coverage_factor,
        s.max_anisotropy_percent
            .map(|a| format!(" Largest anisotropy {a} %."))
            .unwrap_or_default(),
        s.max_unevenness_percent
            .map(|a| format!(" Largest unevenness {a} %."))
            .unwrap_or_default(),
        s.calibration
            .as_ref()
            .map(|c| format!(" Calibration `{c}`."))
            .unwrap_or_default()
    );
    let _ = writeln!(
        b,
        "\nMade {}{}{}.\n",
        s.generated,
        s.station
            .as_ref()
            .map(|x| format!(", station {x}"))
            .unwrap_or_default(),
        s.operator
            .as_ref()
            .map(|x| format!(", operator {x}"))
            .unwrap_or_default()
    );
    let measured = s.entries.iter().filter(|e| e.measured()).count();
    let refined = s
        .entries
        .iter()
        .filter(|e| e.measured() && e.refined)
        .count();
    let _ = writeln!(
        b,
        "Partial frequencies: {refined} of {measured} measured recordings refined by the damped-sinusoid fit, the others from the FFT peaks (`frequency_method` in `inspect.csv`).\n"
    );
    b.push_str("| decision | recordings |\n|---|---:|\n");
    for (d, n) in tally(s) {
        let _ = writeln!(b, "| {} | {n} |", decision_label(d));
    }
    let _ = writeln!(b, "| **all** | **{}** |", s.entries.len());
    out.push(("The batch at a glance".to_string(), b));

    // Spread.
    let mut b = String::new();
    if has_pic(HISTOGRAM_NAME) {
        let _ = writeln!(
            b,
            "![Fitted tension against the limits]({HISTOGRAM_NAME})\n"
        );
        let _ = writeln!(
            b,
            "{} measured recordings; mean {} N/m, sample standard deviation s = {} N/m, range {} … {} N/m. About √n bins, with edges on the limits; the red lines are the limits L and H.",
            values.len(),
            opt(stats::mean(&values), 1),
            opt(stats::std_dev(&values), 2),
            opt(values.iter().copied().reduce(f64::min), 1),
            opt(values.iter().copied().reduce(f64::max), 1)
        );
    } else {
        b.push_str("No recording was measured, so there is no spread to show.\n");
    }
    out.push(("Spread of the fitted tension".to_string(), b));

    // Run chart.
    let mut b = String::new();
    match stats::individuals_chart(&values) {
        Some(c) => {
            if has_pic(RUN_CHART_NAME) {
                let _ = writeln!(b, "![Individuals chart of the tension]({RUN_CHART_NAME})\n");
            }
            let _ = writeln!(
                b,
                "Individuals chart (NIST/SEMATECH e-Handbook of Statistical Methods §6.3.2.2), measured recordings in batch order: moving ranges MRᵢ = |xᵢ − xᵢ₋₁|, centre x̄ = {:.2} N/m, MR̄ = {:.2} N/m, σ̂ = MR̄/d₂ = {:.2} N/m (d₂ = {}), control limits x̄ ± 3σ̂ = {:.2} … {:.2} N/m; moving-range limit D₄·MR̄ = {:.2} N/m (D₄ = {}). The limits are computed from this batch (a phase I chart).\n",
                c.centre,
                c.average_moving_range,
                c.sigma,
                stats::D2_N2,
                c.lcl,
                c.ucl,
                c.moving_range_ucl,
                stats::D4_N2
            );
            if c.out_of_control.is_empty() {
                b.push_str("No point is outside the control limits.\n");
            } else {
                let _ = writeln!(
                    b,
                    "{} points signal (outside x̄ ± 3σ̂, or a moving range above D₄·MR̄):\n",
                    c.out_of_control.len()
                );
                for &k in c.out_of_control.iter().take(30) {
                    let (pos, e) = pts[k];
                    let p = &c.points[k];
                    let _ = writeln!(
                        b,
                        "- #{pos} `{}`: {:.1} N/m{}{}",
                        e.file,
                        p.value,
                        if p.above_ucl || p.below_lcl {
                            " (outside the control limits)"
                        } else {
                            ""
                        },
                        if p.moving_range_above_ucl {
                            " (jump from the previous recording)"
                        } else {
                            ""
                        }
                    );
                }
                if c.out_of_control.len() > 30 {
                    let _ = writeln!(b, "- … and {} more", c.out_of_control.len() - 30);
                }
            }
        }
        None => b.push_str("Fewer than two measured recordings: no control chart.\n"),
    }
    out.push(("Tension in recording order".to_string(), b));

    // Capability.
    let mut b = String::new();
    let (within, overall) = capabilities(&values, s);
    b.push_str("Formulas after the NIST/SEMATECH e-Handbook §6.1.6, with USL = H and LSL = L:\n\n");
    b.push_str("- Cp = (USL − LSL)/(6σ̂), Cpk = min(USL − μ, μ − LSL)/(3σ̂) with the short-term σ̂ = MR̄/d₂ from the moving ranges;\n");
    b.push_str("- Pp = (USL − LSL)/(6s), Ppk = min(USL − μ, μ − LSL)/(3s) with the overall sample standard deviation s.\n\n");
    match (within, overall) {
        (Some(w), Some(o)) => {
            b.push_str(
                "| index | value | μ [N/m] | σ [N/m] | σ from |\n|---|---:|---:|---:|---|\n",
            );
            let _ = writeln!(
                b,
                "| Cp | {} | {:.2} | {:.3} | MR̄/d₂ |",
                opt(w.cp, 3),
                w.mean,
                w.sigma
            );
            let _ = writeln!(
                b,
                "| Cpk | {} | {:.2} | {:.3} | MR̄/d₂ |",
                opt(w.cpk, 3),
                w.mean,
                w.sigma
            );
            let _ = writeln!(
                b,
                "| Pp | {} | {:.2} | {:.3} | s |",
                opt(o.cp, 3),
                o.mean,
                o.sigma
            );
            let _ = writeln!(
                b,
                "| Ppk | {} | {:.2} | {:.3} | s |",
                opt(o.cpk, 3),
                o.mean,
                o.sigma
            );
            if w.n < CAPABILITY_MIN_N {
                let _ = writeln!(
                    b,
                    "\nOnly {} measured recordings: the handbook asks for about {CAPABILITY_MIN_N} before an index means much.",
                    w.n
                );
            }
        }
        _ => b.push_str("Fewer than two measured recordings: no capability index.\n"),
    }
    out.push(("Capability against the limits".to_string(), b));

    // Anisotropy.
    let mut b = String::new();
    let aniso: Vec<&BatchEntry> = s
        .entries
        .iter()
        .filter(|e| e.measured() && e.anisotropy_percent.is_some())
        .collect();
    if aniso.is_empty() {
        let _ = writeln!(
            b,
            "The {} model does not measure anisotropy (only `biaxial` does, on rectangles), so there is no anisotropy distribution for this batch.",
            s.model
        );
    } else {
        if has_pic(ANISOTROPY_NAME) {
            let _ = writeln!(b, "![Anisotropy distribution]({ANISOTROPY_NAME})\n");
        }
        let a: Vec<f64> = aniso.iter().filter_map(|e| e.anisotropy_percent).collect();
        let _ = writeln!(
            b,
            "Anisotropy 100·(Tx − Ty)/((Tx + Ty)/2) of {} recordings: mean {} %, s = {} %, range {} … {} %; typical standard uncertainty {} %.",
            a.len(),
            opt(stats::mean(&a), 2),
            opt(stats::std_dev(&a), 2),
            opt(a.iter().copied().reduce(f64::min), 2),
            opt(a.iter().copied().reduce(f64::max), 2),
            opt(median(aniso.iter().filter_map(|e| e.anisotropy_u_percent)), 2)
        );
        match s.max_anisotropy_percent {
            Some(m) => {
                let _ = writeln!(
                    b,
                    "\nLimit |a| ≤ {m} % (red lines at ±{m} %), judged under the {} rule with each recording's own uncertainty: {}.",
                    s.rule,
                    judgement_tally(aniso.iter().filter_map(|e| e.anisotropy_decision.as_deref()))
                );
            }
            None => b.push_str("\nThe specification sets no anisotropy limit.\n"),
        }
    }
    out.push(("Anisotropy".to_string(), b));

    // Unevenness.
    let mut b = String::new();
    let uneven: Vec<&BatchEntry> = s
        .entries
        .iter()
        .filter(|e| e.measured() && e.unevenness_percent.is_some())
        .collect();
    let unresolved = pts.len() - uneven.len();
    if uneven.is_empty() && !s.unevenness_applies {
        let _ = writeln!(
            b,
            "The unevenness is read from split mode pairs of a circle or a square panel measured with the isotropic or air model; it does not apply to this specification{}.",
            if s.model == "biaxial" {
                " (the anisotropy above is its measure of uneven tension)"
            } else {
                ""
            }
        );
    } else if uneven.is_empty() {
        let _ = writeln!(
            b,
            "No measured recording resolved a split mode pair, so there is no unevenness distribution for this batch (the unevenness is read from split pairs of a circle or a square panel).{}",
            s.max_unevenness_percent
                .map(|m| format!(" The limit {m} % could not be applied: those recordings were decided on the tension alone, with the reason \"evenness not measurable: no split pair resolved\"."))
                .unwrap_or_default()
        );
    } else {
        if has_pic(UNEVENNESS_NAME) {
            let _ = writeln!(b, "![Unevenness distribution]({UNEVENNESS_NAME})\n");
        }
        let a: Vec<f64> = uneven.iter().filter_map(|e| e.unevenness_percent).collect();
        let _ = writeln!(
            b,
            "Unevenness, the spread 2|ε| of the principal tensions (tightest over slackest direction, minus one, to first order), of {} recordings: mean {} %, s = {} %, range {} … {} %; typical standard uncertainty {} %.",
            a.len(),
            opt(stats::mean(&a), 2),
            opt(stats::std_dev(&a), 2),
            opt(a.iter().copied().reduce(f64::min), 2),
            opt(a.iter().copied().reduce(f64::max), 2),
            opt(median(uneven.iter().filter_map(|e| e.unevenness_u_percent)), 2)
        );
        if let Some(m) = s.max_unevenness_percent {
            let _ = writeln!(
                b,
                "\nLimit {m} % (red line), judged under the {} rule with each recording's own uncertainty: {}.",
                s.rule,
                judgement_tally(uneven.iter().filter_map(|e| e.unevenness_decision.as_deref()))
            );
        }
        if unresolved > 0 {
            let _ = writeln!(
                b,
                "\n{unresolved} measured recording(s) resolved no split pair: evenness not measurable{}.",
                if s.max_unevenness_percent.is_some() {
                    ", decided on the tension alone"
                } else {
                    ""
                }
            );
        }
    }
    out.push(("Unevenness".to_string(), b));

    // Not measured.
    let mut b = String::new();
    let missing: Vec<(usize, &BatchEntry)> = s
        .entries
        .iter()
        .enumerate()
        .filter(|(_, e)| !e.measured())
        .map(|(i, e)| (i + 1, e))
        .collect();
    if missing.is_empty() {
        b.push_str("Every recording was measured.\n");
    } else {
        b.push_str("| # | recording | status | reason |\n|---:|---|---|---|\n");
        for (i, e) in missing {
            cells_row(
                &mut b,
                &[
                    i.to_string(),
                    format!("`{}`", e.file),
                    decision_label(&e.decision).to_string(),
                    e.reason.clone().unwrap_or_else(|| "–".into()),
                ],
            );
        }
    }
    out.push(("Recordings not measured".to_string(), b));

    // Every recording.
    let mut b = String::new();
    b.push_str("Tension ± u (k = 1, fit and areal density), U = k·u, margin to the nearest limit (positive inside).\n\n");
    b.push_str("| # | recording | decision | tension [N/m] | U [N/m] | margin [N/m] | grade |\n|---:|---|---|---:|---:|---:|---|\n");
    for (i, e) in s.entries.iter().enumerate() {
        let t = match (e.tension_n_per_m, e.tension_u_n_per_m) {
            (Some(t), Some(u)) => format!("{t:.1} ± {u:.1}"),
            (Some(t), None) => format!("{t:.1}"),
            _ => "–".into(),
        };
        let margin = match (e.margin_n_per_m, &e.nearest_limit) {
            (Some(m), Some(side)) => format!("{m:+.1} ({side})"),
            (Some(m), None) => format!("{m:+.1}"),
            _ => "–".into(),
        };
        cells_row(
            &mut b,
            &[
                (i + 1).to_string(),
                format!("`{}`", e.file),
                decision_label(&e.decision).to_string(),
                t,
                opt(e.expanded_u_n_per_m, 1),
                margin,
                e.grade.clone().unwrap_or_else(|| "–".into()),
            ],
        );
    }
    out.push(("Every recording".to_string(), b));
    out
}

/// Median of some values (None when there are none).
fn median(values: impl Iterator<Item = f64>) -> Option<f64> {
    let mut v: Vec<f64> = values.filter(|x| x.is_finite()).collect();
    if v.is_empty() {
        return None;
    }
    v.sort_by(f64::total_cmp);
    let n = v.len();
    Some(if n % 2 == 1 {
        v[n / 2]
    } else {
        0.5 * (v[n / 2 - 1] + v[n / 2])
    })
}

/// "12 within the limit, 3 beyond it, 2 in the guard band".
fn judgement_tally<'a>(decisions: impl Iterator<Item = &'a str>) -> String {
    let (mut pass, mut fail, mut band) = (0, 0, 0);
    for d in decisions {
        match d {
            "pass" => pass += 1,
            "fail" => fail += 1,
            _ => band += 1,
        }
    }
    format!("{pass} within the limit, {fail} beyond it, {band} in the guard band (indeterminate)")
}

fn short_hash(h: &str) -> String {
    h.chars().take(12).collect()
}

fn markdown_with(s: &BatchSummary, pics: &Pictures) -> String {
    let mut out = format!(
        "# Batch report: {} v{}, {} recordings\n\n",
        s.spec_name,
        s.spec_version,
        s.entries.len()
    );
    for (h, body) in sections(s, pics) {
        let _ = write!(out, "## {h}\n\n{body}\n");
    }
    out
}

fn html_escape(s: &str) -> String {
    let mut o = String::with_capacity(s.len());
    for c in s.chars() {
        match c {
            '&' => o.push_str("&amp;"),
            '<' => o.push_str("&lt;"),
            '>' => o.push_str("&gt;"),
            '"' => o.push_str("&quot;"),
            _ => o.push(c),
        }
    }
    o
}

/// Inline Markdown of our own bodies: `code`, **bold**.
fn html_inline(s: &str) -> String {
    let e = html_escape(s).replace("\\|", "|");
    let mut o = String::new();
    let mut code = false;
    let mut bold = false;
    let mut rest = e.as_str();
    while let Some(c) = rest.chars().next() {
        if rest.starts_with("**") && !code {
            o.push_str(if bold { "</strong>" } else { "<strong>" });
            bold = !bold;
            rest = &rest[2..];
        } else if c == '`' {
            o.push_str(if code { "</code>" } else { "<code>" });
            code = !code;
            rest = &rest[1..];
        } else {
            o.push(c);
            rest = &rest[c.len_utf8()..];
        }
    }
    o
}

/// Splits a table line into cells, honouring `\|`.
fn table_cells(line: &str) -> Vec<String> {
    let inner = line.trim().trim_start_matches('|').trim_end_matches('|');
    let mut cells = Vec::new();
    let mut cur = String::new();
    let mut chars = inner.chars().peekable();
    while let Some(c) = chars.next() {
        if c == '\\' && chars.peek() == Some(&'|') {
            cur.push_str("\\|");
            chars.next();
        } else if c == '|' {
            cells.push(cur.trim().to_string());
            cur.clear();
        } else {
            cur.push(c);
        }
    }
    cells.push(cur.trim().to_string());
    cells
}

/// Turns one of our Markdown bodies (paragraphs, lists, pipe tables,
/// images) into HTML; images become `data:` URIs.
fn body_html(body: &str, pics: &Pictures) -> String {
    let mut o = String::new();
    let lines: Vec<&str> = body.lines().collect();
    let mut i = 0;
    while i < lines.len() {
        let l = lines[i];
        if l.trim().is_empty() {
            i += 1;
        } else if let Some(rest) = l.strip_prefix("![") {
            let (alt, src) = rest.split_once("](").unwrap_or((rest, ""));
            let src = src.trim_end_matches(')');
            if let Some((_, png, _)) = pics.items.iter().find(|p| p.0 == src) {
                let _ = writeln!(
                    o,
                    "<figure><img alt=\"{}\" src=\"data:image/png;base64,{}\"></figure>",
                    html_escape(alt),
                    base64(png)
                );
            }
            i += 1;
        } else if l.starts_with('|') {
            o.push_str("<table>\n");
            let header = table_cells(l);
            let aligns: Vec<bool> = lines
                .get(i + 1)
                .map(|s| table_cells(s).iter().map(|c| c.ends_with(':')).collect())
                .unwrap_or_default();
            o.push_str("<thead><tr>");
            for (k, c) in header.iter().enumerate() {
                let cls = if aligns.get(k).copied().unwrap_or(false) {
                    " class=\"n\""
                } else {
                    ""
                };
                let _ = write!(o, "<th{cls}>{}</th>", html_inline(c));
            }
            o.push_str("</tr></thead>\n<tbody>\n");
            i += 2;
            while i < lines.len() && lines[i].starts_with('|') {
                o.push_str("<tr>");
                for (k, c) in table_cells(lines[i]).iter().enumerate() {
                    let cls = if aligns.get(k).copied().unwrap_or(false) {
                        " class=\"n\""
                    } else {
                        ""
                    };
                    let decision_cls = match c.as_str() {
                        "pass" | "fail" | "indeterminate" => format!(" data-d=\"{c}\""),
                        _ => String::new(),
                    };
                    let _ = write!(o, "<td{cls}{decision_cls}>{}</td>", html_inline(c));
                }
                o.push_str("</tr>\n");
                i += 1;
            }
            o.push_str("</tbody></table>\n");
        } else if l.starts_with("- ") {
            o.push_str("<ul>\n");
            while i < lines.len() && lines[i].starts_with("- ") {
                let _ = writeln!(o, "<li>{}</li>", html_inline(&lines[i][2..]));
                i += 1;
            }
            o.push_str("</ul>\n");
        } else {
            let mut para = Vec::new();
            while i < lines.len()
                && !lines[i].trim().is_empty()
                && !lines[i].starts_with('|')
                && !lines[i].starts_with("- ")
                && !lines[i].starts_with("![")
            {
                para.push(lines[i]);
                i += 1;
            }
            let _ = writeln!(o, "<p>{}</p>", html_inline(&para.join(" ")));
        }
    }
    o
}

const CSS: &str = "body{font-family:'DejaVu Sans',Verdana,sans-serif;color:#262a30;max-width:1240px;margin:2em auto;padding:0 1em;line-height:1.45}\
h1{font-size:1.6em;border-bottom:3px solid #5c80aa;padding-bottom:.3em}\
h2{font-size:1.2em;margin-top:2em;color:#34506f}\
table{border-collapse:collapse;margin:.8em 0;font-size:.92em}\
th,td{border:1px solid #d5d9df;padding:.25em .6em;text-align:left}\
th{background:#eef1f5}td.n,th.n{text-align:right;font-variant-numeric:tabular-nums}\
td[data-d=pass]{color:#28788f}td[data-d=fail]{color:#b03028;font-weight:bold}td[data-d=indeterminate]{color:#a06a00}\
code{font-size:.9em;background:#f3f4f6;padding:0 .2em}\
figure{margin:1em 0}img{max-width:100%;border:1px solid #e2e5ea}";

fn html_with(s: &BatchSummary, pics: &Pictures) -> String {
    let title = format!(
        "Batch report: {} v{}, {} recordings",
        s.spec_name,
        s.spec_version,
        s.entries.len()
    );
    let mut o = format!(
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n<title>{t}</title>\n<style>{CSS}</style>\n</head>\n<body>\n<h1>{t}</h1>\n",
        t = html_escape(&title)
    );
    for (h, body) in sections(s, pics) {
        let _ = write!(
            o,
            "<section>\n<h2>{}</h2>\n{}</section>\n",
            html_escape(&h),
            body_html(&body, pics)
        );
    }
    o.push_str("</body>\n</html>\n");
    o
}

/// Writes the pictures, `batch-report.md` and `batch-report.html` into
/// `dir`, each atomically; returns the paths written.
///
/// # Errors
/// [`TonusError::Write`] when a picture cannot be drawn or a file cannot
/// be written.
pub fn write_batch_report(dir: &Path, s: &BatchSummary) -> Result<Vec<PathBuf>> {
    let pics = pictures(s).map_err(|reason| TonusError::Write {
        path: dir.join(HISTOGRAM_NAME),
        reason,
    })?;
    let mut written = Vec::new();
    for (name, png, _) in &pics.items {
        let p = dir.join(name);
        crate::base::files::write_atomic(&p, png)?;
        written.push(p);
    }
    // Pictures from an earlier batch that this one does not have (no
    // anisotropy, nothing measured) would be misleading beside it.
    for name in [
        HISTOGRAM_NAME,
        RUN_CHART_NAME,
        ANISOTROPY_NAME,
        UNEVENNESS_NAME,
    ] {
        if !pics.items.iter().any(|p| p.0 == name) {
            let _ = std::fs::remove_file(dir.join(name));
        }
    }
    let md = dir.join(MARKDOWN_NAME);
    crate::base::files::write_atomic(&md, markdown_with(s, &pics).as_bytes())?;
    written.push(md);
    let html = dir.join(HTML_NAME);
    crate::base::files::write_atomic(&html, html_with(s, &pics).as_bytes())?;
    written.push(html);
    Ok(written)
}

/// An output file that grows row by row and is published atomically.
///
/// Rows go to a private spool file beside the output
/// (`NAME.part-PID-spool`), so memory does not grow with the batch.
/// [`Spool::publish`] copies the spool to a temporary sibling and renames
/// it over `NAME`, so `NAME` is always absent or complete as of some
/// publish; [`Spool::finish`] publishes for the last time and removes the
/// spool.
#[derive(Debug)]
pub struct Spool {
    path: PathBuf,
    spool_path: PathBuf,
    file: std::io::BufWriter<std::fs::File>,
}

impl Spool {
    /// Starts a spool for `path` holding `header` (may be empty).
    ///
    /// # Errors
    /// [`TonusError::Write`] when the folder is not writable.
    pub fn create(path: &Path, header: &[u8]) -> Result<Spool> {
        let mut s = path.as_os_str().to_owned();
        s.push(format!(".part-{}-spool", std::process::id()));
        let spool_path = PathBuf::from(s);
        let file = std::fs::File::create(&spool_path).map_err(|e| TonusError::Write {
            path: path.to_path_buf(),
            reason: e.to_string(),
        })?;
        let mut spool = Spool {
            path: path.to_path_buf(),
            spool_path,
            file: std::io::BufWriter::new(file),
        };
        spool.append(header)?;
        Ok(spool)
    }

    fn err(&self, e: impl std::fmt::Display) -> TonusError {
        TonusError::Write {
            path: self.path.clone(),
            reason: e.to_string(),
        }
    }

    /// Appends bytes (one or more whole rows).
    ///
    /// # Errors
    /// [`TonusError::Write`] when the disk is full.
    pub fn append(&mut self, bytes: &[u8]) -> Result<()> {
        self.file.write_all(bytes).map_err(|e| self.err(e))
    }

    /// Makes `NAME` hold every row appended so far (copy, then rename).
    ///
    /// # Errors
    /// [`TonusError::Write`] when the copy or the rename fails; `NAME`
    /// is then left as it was.
    pub fn publish(&mut self) -> Result<()> {
        self.file.flush().map_err(|e| self.err(e))?;
        let tmp = crate::base::files::temp_path(&self.path);
        let done =
            std::fs::copy(&self.spool_path, &tmp).and_then(|_| std::fs::rename(&tmp, &self.path));
        if let Err(e) = done {
            let _ = std::fs::remove_file(&tmp);
            return Err(self.err(e));
        }
        Ok(())
    }

    /// Publishes the last time and removes the spool.
    ///
    /// # Errors
    /// As [`Spool::publish`].
    pub fn finish(mut self) -> Result<()> {
        self.file.flush().map_err(|e| self.err(e))?;
        std::fs::rename(&self.spool_path, &self.path).map_err(|e| self.err(e))
    }
}

impl Drop for Spool {
    fn drop(&mut self) {
        // After `finish` the spool has been renamed away and this does
        // nothing; after an error it removes the private file.
        let _ = std::fs::remove_file(&self.spool_path);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn close_labels_keep_their_order_and_spread_about_their_lines() {
        let out = spread_labels(
            vec![(0, 100, 'a'), (0, 40, 'b'), (0, 104, 'c'), (0, 108, 'd')],
            16,
        );
        let ys: Vec<(i32, char)> = out.iter().map(|l| (l.1, l.2)).collect();
        // b stands alone; a, c, d (wanted 100, 104, 108) centre on 104.
        assert_eq!(ys, vec![(40, 'b'), (88, 'a'), (104, 'c'), (120, 'd')]);
    }

    #[test]
    fn base64_matches_the_rfc_4648_test_vectors() {
        // RFC 4648 §10.
        let cases = [
            ("", ""),
            ("f", "Zg=="),
            ("fo", "Zm8="),
            ("foo", "Zm9v"),
            ("foob", "Zm9vYg=="),
            ("fooba", "Zm9vYmE="),
            ("foobar", "Zm9vYmFy"),
        ];
        for (plain, coded) in cases {
            assert_eq!(base64(plain.as_bytes()), coded, "{plain:?}");
        }
        assert_eq!(base64(&[0xfb, 0xff, 0xfe]), "+//+");
    }

    fn entry(file: &str, decision: &str, t: Option<f64>) -> BatchEntry {
        BatchEntry {
            file: file.into(),
            decision: decision.into(),
            tension_n_per_m: t,
            tension_u_n_per_m: t.map(|_| 20.0),
            expanded_u_n_per_m: t.map(|_| 40.0),
            margin_n_per_m: t.map(|t| (t - 1800.0).min(2200.0 - t)),
            nearest_limit: t.map(|t| {
                if t < 2000.0 {
                    "lower".into()
                } else {
                    "upper".into()
                }
            }),
            grade: Some("sound".into()),
            reason: (decision == "error").then(|| "not a WAV file".into()),
            ..Default::default()
        }
    }

    fn summary(entries: Vec<BatchEntry>) -> BatchSummary {
        BatchSummary {
            spec_name: "screen | test".into(),
            spec_version: "1".into(),
            spec_sha256: "ab".repeat(32),
            model: "isotropic".into(),
            rule: "guarded".into(),
            rule_description: "guarded acceptance".into(),
            coverage_factor: 2.0,
            nominal_n_per_m: 2000.0,
            lower_n_per_m: 1800.0,
            upper_n_per_m: 2200.0,
            generated: "2026-12-02T00:00:00Z".into(),
            entries,
            ..Default::default()
        }
    }

    #[test]
    fn report_lists_decisions_statistics_and_the_unmeasured() {
        let mut e = vec![
            entry("a.wav", "pass", Some(2000.0)),
            entry("b.wav", "fail", Some(1500.0)),
            entry("c.wav", "indeterminate", Some(1810.0)),
            entry("d.wav", "error", None),
        ];
        e.push(BatchEntry {
            reason: Some("grade doubtful".into()),
            ..entry("e.wav", "not_measured", None)
        });
        let s = summary(e);
        let dir = tempfile::tempdir().unwrap();
        let written = write_batch_report(dir.path(), &s).unwrap();
        let md = std::fs::read_to_string(dir.path().join(MARKDOWN_NAME)).unwrap();
        // The tally, the statistics on the three measured values only,
        // and both unmeasured recordings with their reasons.
        assert!(
            md.contains("| pass | 1 |") && md.contains("| fail | 1 |"),
            "{md}"
        );
        assert!(md.contains("| **all** | **5** |"));
        assert!(
            md.contains("3 measured recordings; mean 1770.0 N/m"),
            "{md}"
        );
        assert!(md.contains("not a WAV file") && md.contains("grade doubtful"));
        assert!(md.contains("Cpk") && md.contains("min(USL − μ, μ − LSL)/(3σ̂)"));
        assert!(md.contains("does not measure anisotropy"));
        // A `|` in a name does not break the table.
        assert!(md.contains("screen | test"));
        let html = std::fs::read_to_string(dir.path().join(HTML_NAME)).unwrap();
        assert!(html.contains("data:image/png;base64,iVBORw0KGgo"));
        assert!(!html.contains("src=\"batch-"), "pictures are embedded");
        for name in [HISTOGRAM_NAME, RUN_CHART_NAME] {
            let p = dir.path().join(name);
            assert!(written.contains(&p));
            let bytes = std::fs::read(&p).unwrap();
            assert_eq!(&bytes[1..4], b"PNG");
            // Width and height from the IHDR chunk.
            let w = u32::from_be_bytes(bytes[16..20].try_into().unwrap());
            assert_eq!(w, PICTURE_WIDTH_PX);
        }
        assert!(!dir.path().join(ANISOTROPY_NAME).exists());
    }

    #[test]
    fn anisotropy_is_drawn_when_the_model_gives_it() {
        let e: Vec<BatchEntry> = (0..20)
            .map(|i| BatchEntry {
                anisotropy_percent: Some(-3.0 + 0.3 * i as f64),
                anisotropy_u_percent: Some(0.1),
                ..entry(&format!("m{i}.wav"), "pass", Some(1950.0 + 5.0 * i as f64))
            })
            .collect();
        let mut s = summary(e);
        s.model = "biaxial".into();
        s.max_anisotropy_percent = Some(5.0);
        let dir = tempfile::tempdir().unwrap();
        write_batch_report(dir.path(), &s).unwrap();
        assert!(dir.path().join(ANISOTROPY_NAME).exists());
        let md = std::fs::read_to_string(dir.path().join(MARKDOWN_NAME)).unwrap();
        assert!(
            md.contains("Anisotropy 100·(Tx − Ty)/((Tx + Ty)/2) of 20 recordings"),
            "{md}"
        );
        assert!(md.contains("Only 20 measured recordings"));
        assert!(md.contains("Limit |a| ≤ 5 %"), "{md}");
    }

    #[test]
    fn unevenness_and_an_interruption_are_reported() {
        let mut e: Vec<BatchEntry> = (0..12)
            .map(|i| BatchEntry {
                unevenness_percent: Some(0.5 + 0.25 * i as f64),
                unevenness_u_percent: Some(0.2),
                unevenness_decision: Some(if i < 8 { "pass" } else { "fail" }.into()),
                ..entry(&format!("h{i}.wav"), "pass", Some(2000.0))
            })
            .collect();
        e.push(entry("even.wav", "pass", Some(2010.0)));
        let mut s = summary(e);
        s.max_unevenness_percent = Some(2.5);
        s.unevenness_applies = true;
        s.interrupted = Some(Interruption {
            signal: "SIGINT".into(),
            signal_number: 2,
            decided: 13,
            total: Some(40),
        });
        let dir = tempfile::tempdir().unwrap();
        write_batch_report(dir.path(), &s).unwrap();
        assert!(dir.path().join(UNEVENNESS_NAME).exists());
        let md = std::fs::read_to_string(dir.path().join(MARKDOWN_NAME)).unwrap();
        assert!(md.contains("interrupted by SIGINT"), "{md}");
        assert!(
            md.contains("13 of 40 recordings were decided, 27 were not"),
            "{md}"
        );
        assert!(md.contains("of 12 recordings: mean 1.88 %"), "{md}");
        assert!(md.contains("8 within the limit, 4 beyond it"), "{md}");
        assert!(
            md.contains("1 measured recording(s) resolved no split pair"),
            "{md}"
        );
    }

    #[test]
    fn nothing_measured_still_makes_a_report() {
        let s = summary(vec![entry("x.wav", "error", None)]);
        let dir = tempfile::tempdir().unwrap();
        write_batch_report(dir.path(), &s).unwrap();
        let md = std::fs::read_to_string(dir.path().join(MARKDOWN_NAME)).unwrap();
        assert!(md.contains("No recording was measured"));
        assert!(md.contains("no control chart"));
        assert!(!dir.path().join(HISTOGRAM_NAME).exists());
    }

    #[test]
    fn spool_publishes_whole_files() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("rows.csv");
        let mut s = Spool::create(&p, b"a,b\n").unwrap();
        s.append(b"1,2\n").unwrap();
        assert!(!p.exists(), "nothing published yet");
        s.publish().unwrap();
        assert_eq!(std::fs::read_to_string(&p).unwrap(), "a,b\n1,2\n");
        s.append(b"3,4\n").unwrap();
        assert_eq!(std::fs::read_to_string(&p).unwrap(), "a,b\n1,2\n");
        s.finish().unwrap();
        assert_eq!(std::fs::read_to_string(&p).unwrap(), "a,b\n1,2\n3,4\n");
        let left: Vec<_> = std::fs::read_dir(dir.path()).unwrap().collect();
        assert_eq!(left.len(), 1, "no spool or temporary file left");
    }
}
