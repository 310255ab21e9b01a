//! Reports: the only module that writes CSV, JSON, Markdown, HTML and PNG
//! (`batch` holds the batch report of `inspect` and its growing CSV / JSON
//! Lines outputs).
//!
//! Every file is written to a temporary sibling (`NAME.part`) and renamed
//! into place, so an interrupted run never leaves a half-written output.

pub mod batch;
pub mod plot;
pub mod png;

use crate::base::files::write_atomic;
use std::path::{Path, PathBuf};

pub mod csv;
pub mod json;
pub mod markdown;
pub mod round;
pub mod round_png;
pub mod round_points;
pub mod text;

use crate::base::error::{Result, TonusError};
use crate::base::units::TensionUnit;
use crate::fitting::measurement::Measurement;

/// The picture's data, taken from a measurement.
pub fn spectrum_plot(file: &Path, m: &Measurement, unit: TensionUnit) -> png::SpectrumPlot {
    let spectrum = &m.analysis.spectrum;
    let top_partial = m
        .analysis
        .partials
        .iter()
        .map(|p| p.frequency_hz)
        .fold(0.0, f64::max);
    let max_f = (top_partial * 1.1)
        .max(200.0)
        .min(spectrum.bin_hz * (spectrum.power.len() - 1) as f64);
    let n = ((max_f / spectrum.bin_hz) as usize + 1).min(spectrum.power.len());
    let freqs_hz: Vec<f64> = (0..n).map(|k| k as f64 * spectrum.bin_hz).collect();
    let level_db: Vec<f64> = (0..n).map(|k| spectrum.level_db(k)).collect();
    let floor_db: Vec<f64> = (0..n).map(|k| spectrum.floor_db(k)).collect();
    let matched: Vec<usize> = m
        .matching
        .as_ref()
        .map(|x| x.assignments.iter().map(|a| a.partial).collect())
        .unwrap_or_default();
    let partials = m
        .analysis
        .partials
        .iter()
        .enumerate()
        .map(|(i, p)| png::PlotPartial {
            frequency_hz: p.frequency_hz,
            level_db: p.level_db,
            matched: matched.contains(&i),
            t60_s: p.t60_s,
            pair: p
                .pair
                .map(|q| (q.splitting_hz, q.lower.t60_s, q.upper.t60_s)),
        })
        .collect();
    let mut lines = Vec::new();
    if let (Some(f), Some(x)) = (&m.fit, &m.matching) {
        let c = f.wave_speed.value;
        let assigned: Vec<(usize, f64)> = x
            .assignments
            .iter()
            .enumerate()
            .map(|(i, a)| (a.line, f.residuals_cents[i]))
            .collect();
        for (j, l) in m.lines.iter().enumerate() {
            let fr = c * l.factor;
            if fr > max_f {
                break;
            }
            let hit = assigned.iter().find(|(line, _)| *line == j);
            lines.push(png::PlotLine {
                frequency_hz: crate::fitting::fit::predicted_hz(f, l.factor, l.labels[0]),
                label: l.label_text(),
                matched: hit.is_some(),
                residual_cents: hit.map(|h| h.1),
                expected_weak: l.coupling < crate::fitting::matching::WEAK_COUPLING,
            });
        }
    }
    let name = file
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default();
    let subtitle = match (m.tension, &m.fit) {
        (Some(t), Some(f)) => format!(
            "T = {} · rms residual {:.1} cents · {} modes · quality: {}",
            text::pm(
                t.value / unit.newtons_per_meter(),
                t.standard_uncertainty / unit.newtons_per_meter(),
                unit.symbol()
            ),
            f.rms_residual_cents,
            f.n_used,
            m.quality.grade.name()
        ),
        (None, Some(f)) => format!(
            "c = {} · rms residual {:.1} cents · {} modes · quality: {}",
            text::pm(f.wave_speed.value, f.wave_speed.standard_uncertainty, "m/s"),
            f.rms_residual_cents,
            f.n_used,
            m.quality.grade.name()
        ),
        _ => format!("no fit · quality: {}", m.quality.grade.name()),
    };
    png::SpectrumPlot {
        title: format!("{name} — {}", m.panel.describe()),
        subtitle,
        freqs_hz,
        level_db,
        floor_db,
        partials,
        lines,
        hum_hz: m
            .analysis
            .hum
            .iter()
            .map(|h| h.partial.frequency_hz)
            .collect(),
        max_frequency_hz: max_f,
    }
}

/// Writes the Markdown report, JSON record, mode CSV and (optionally) the
/// spectrum PNG of one fit into `dir`, named after the recording. Returns
/// the paths written.
///
/// # Errors
/// When the directory cannot be created or a file cannot be written.
pub fn write_fit_outputs(
    dir: &Path,
    file: &Path,
    m: &Measurement,
    unit: TensionUnit,
    picture: bool,
) -> Result<Vec<PathBuf>> {
    std::fs::create_dir_all(dir).map_err(|e| TonusError::Write {
        path: dir.to_path_buf(),
        reason: e.to_string(),
    })?;
    let stem = file
        .file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_else(|| "recording".into());
    let mut written = Vec::new();
    let png_name = format!("{stem}.spectrum.png");
    let png_path = dir.join(&png_name);
    if picture {
        png::write_png(&png_path, &spectrum_plot(file, m, unit))?;
        written.push(png_path);
    }
    let json_path = dir.join(format!("{stem}.json"));
    let record = json::fit_record(file, m, unit);
    let text = serde_json::to_string_pretty(&record).map_err(|e| TonusError::Write {
        path: json_path.clone(),
        reason: e.to_string(),
    })?;
    write_atomic(&json_path, format!("{text}\n").as_bytes())?;
    written.push(json_path);
    let csv_path = dir.join(format!("{stem}.modes.csv"));
    let table = csv::modes_csv(m).map_err(|e| TonusError::Write {
        path: csv_path.clone(),
        reason: e.to_string(),
    })?;
    write_atomic(&csv_path, table.as_bytes())?;
    written.push(csv_path);
    let md_path = dir.join(format!("{stem}.report.md"));
    let md = markdown::fit_report(file, m, unit, picture.then_some(png_name.as_str()));
    write_atomic(&md_path, md.as_bytes())?;
    written.push(md_path);
    Ok(written)
}
