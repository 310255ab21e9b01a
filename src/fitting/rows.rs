//! The mode table of a measurement: one row per matched partial, and the
//! predicted lines that have none.

use crate::base::warning::Warning;
use crate::fitting::fit::{self, FitResult};
use crate::fitting::matching::{Matching, WEAK_COUPLING};
use crate::physics::membrane::ModeLine;
use crate::signal::partials::Partial;
use serde::Serialize;

/// One matched mode in the result.
#[derive(Debug, Clone, Serialize)]
pub struct ModeRow {
    /// First label's m.
    pub m: u32,
    /// First label's n.
    pub n: u32,
    /// All labels of the line, e.g. "(1,2)/(2,1)".
    pub labels: String,
    /// Predicted frequency at the fitted wave speed, Hz.
    pub predicted_hz: f64,
    /// Measured frequency, Hz.
    pub measured_hz: f64,
    /// ln(measured/predicted) in cents.
    pub residual_cents: f64,
    /// Partial level, dB re full-scale sine.
    pub level_db: f64,
    /// Partial SNR, dB.
    pub snr_db: f64,
    /// Partial T60, s.
    pub t60_s: Option<f64>,
    /// Standard uncertainty of the measured frequency, Hz (damped-sinusoid
    /// fit; None for an FFT-peak value).
    pub measured_u_hz: Option<f64>,
    /// Cramér–Rao bound of the measured frequency, Hz.
    pub crlb_hz: Option<f64>,
    /// Level decay rate, dB/s.
    pub decay_rate_db_per_s: Option<f64>,
    /// How the frequency was measured.
    pub method: crate::signal::partials::FrequencyMethod,
    /// Modes sharing the line (2 for a degenerate pair).
    pub degeneracy: usize,
    /// The split pair on this line, when the partial was resolved into
    /// two; the measured frequency is then their mean.
    pub pair: Option<crate::signal::partials::SplitPair>,
    /// Left out of the fit as an outlier.
    pub outlier: bool,
    /// Left out of the fit because a neighbouring line shares its peak.
    pub crowded: bool,
    /// Left out of the fit because the calibration has no factor for it.
    pub uncalibrated: bool,
    /// Other labels that fit this partial about as well.
    pub alternatives: Vec<String>,
}

/// A predicted line that should be visible but has no partial.
#[derive(Debug, Clone, Serialize)]
pub struct MissingMode {
    /// Labels.
    pub labels: String,
    /// Predicted frequency, Hz.
    pub predicted_hz: f64,
    /// Expected coupling at tap and pickup, 0..1.
    pub coupling: f64,
}

/// One row per assignment of `m`, at the fitted wave speed. `uncalibrated`
/// lists the modes without a calibration factor.
pub fn mode_rows(
    f: &FitResult,
    m: &Matching,
    lines: &[ModeLine],
    parts: &[Partial],
    uncalibrated: &[(u32, u32)],
) -> Vec<ModeRow> {
    m.assignments
        .iter()
        .enumerate()
        .map(|(i, a)| {
            let line = &lines[a.line];
            let p = &parts[a.partial];
            let uncal = uncalibrated.contains(&line.labels[0]);
            ModeRow {
                m: line.labels[0].0,
                n: line.labels[0].1,
                labels: line.label_text(),
                predicted_hz: fit::predicted_hz(f, line.factor, line.labels[0]),
                measured_hz: p.frequency_hz,
                residual_cents: f.residuals_cents[i],
                level_db: p.level_db,
                snr_db: p.snr_db,
                t60_s: p.t60_s,
                measured_u_hz: p.frequency_u_hz,
                crlb_hz: p.crlb_hz,
                decay_rate_db_per_s: p.decay_rate_db_per_s,
                method: p.method,
                degeneracy: line.degeneracy,
                pair: p.pair,
                outlier: f.outliers.contains(&i),
                crowded: f.left_out_crowded.contains(&i) && !uncal,
                uncalibrated: uncal,
                alternatives: a
                    .alternatives
                    .iter()
                    .map(|&j| lines[j].label_text())
                    .collect(),
            }
        })
        .collect()
}

/// Warns of every resolved pair on a line of one mode.
pub fn pair_warnings(modes: &[ModeRow], warnings: &mut Vec<Warning>) {
    for r in modes {
        if let (Some(pair), 1) = (r.pair, r.degeneracy) {
            warnings.push(Warning::PairOnSingleMode {
                labels: r.labels.clone(),
                frequencies_hz: (pair.lower.frequency_hz, pair.upper.frequency_hz),
            });
        }
    }
}

/// The lines the matching expected but found no partial for, at the
/// fitted wave speed. A strongly coupled line among the lowest modes with
/// no partial deserves a warning; higher up, weak modes are normal.
pub fn missing_modes(
    f: &FitResult,
    m: &Matching,
    lines: &[ModeLine],
    modes: &[ModeRow],
    warnings: &mut Vec<Warning>,
) -> Vec<MissingMode> {
    let c = f.wave_speed.value;
    let third = modes
        .get(2)
        .or(modes.last())
        .map(|r| r.measured_hz)
        .unwrap_or(0.0);
    let mut missing = Vec::new();
    for &j in &m.missing {
        let predicted = c * lines[j].factor;
        missing.push(MissingMode {
            labels: lines[j].label_text(),
            predicted_hz: predicted,
            coupling: lines[j].coupling,
        });
        if predicted < third && lines[j].coupling >= 2.0 * WEAK_COUPLING {
            warnings.push(Warning::ModeWithoutPeak {
                labels: lines[j].label_text(),
                predicted_hz: predicted,
            });
        }
    }
    missing
}

/// The labels of the rows the calibration has no factor for.
pub fn not_calibrated(modes: &[ModeRow]) -> Vec<String> {
    modes
        .iter()
        .filter(|r| r.uncalibrated)
        .map(|r| r.labels.clone())
        .collect()
}
