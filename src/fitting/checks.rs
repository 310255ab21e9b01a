//! Checks and derived numbers after the fit: the tension from the wave
//! speed, its uncertainty budget, the evenness from resolved pairs, and
//! the checks that feed the grade (signal-to-noise, strong partials left
//! unexplained, the lowest mode).

use crate::base::estimate::{Estimate, CENTS_PER_LN};
use crate::base::warning::Warning;
use crate::fitting::budget::{self, Budget, BudgetInputs};
use crate::fitting::calibration::CalibrationTerm;
use crate::fitting::fit::{self, FitModel, FitResult};
use crate::fitting::matching;
use crate::fitting::measurement::FitOptions;
use crate::fitting::quality;
use crate::fitting::rows::ModeRow;
use crate::physics::membrane::{ModeLine, Shape};
use crate::physics::panel::Panel;
use crate::signal::partials::Partial;

/// Tension T = σ·c² (when σ is known) and T/σ = c², from the fitted wave
/// speed.
pub fn tension(fit: Option<&FitResult>, panel: &Panel) -> (Option<Estimate>, Option<Estimate>) {
    let Some(f) = fit else {
        return (None, None);
    };
    let c = f.wave_speed;
    let t_over = Estimate {
        value: c.value * c.value,
        standard_uncertainty: 2.0 * c.value * c.standard_uncertainty,
    };
    let t = panel.areal_density.map(|s| Estimate {
        value: s.0 * t_over.value,
        standard_uncertainty: s.0 * t_over.standard_uncertainty,
    });
    (t, Some(t_over))
}

/// The GUM budget of an isotropic or air-loaded tension, and the
/// calibration's term in it. With a calibration the budget sees f/r
/// against the ideal lines.
pub fn tension_budget(
    fit: Option<&FitResult>,
    tension: Option<Estimate>,
    panel: &Panel,
    modes: &[ModeRow],
    opts: &FitOptions,
) -> (Option<Budget>, Option<CalibrationTerm>) {
    let (Some(f), Some(t), Some(s)) = (fit, tension, panel.areal_density) else {
        return (None, None);
    };
    if !matches!(f.model, FitModel::Isotropic | FitModel::AirLoaded) {
        return (None, None);
    }
    let used: Vec<usize> = (0..modes.len())
        .filter(|&i| !modes[i].outlier && !modes[i].crowded && !modes[i].uncalibrated)
        .collect();
    let labels: Vec<(u32, u32)> = used.iter().map(|&i| (modes[i].m, modes[i].n)).collect();
    let freqs: Vec<f64> = used
        .iter()
        .map(|&i| {
            let r = opts
                .calibration
                .as_ref()
                .and_then(|c| c.calibration.factor(modes[i].m, modes[i].n))
                .map(|f| f.factor)
                .unwrap_or(1.0);
            modes[i].measured_hz / r
        })
        .collect();
    let calibration_term = opts
        .calibration
        .as_ref()
        .map(|c| c.calibration.term(&labels));
    let b = budget::budget(&BudgetInputs {
        shape: panel.shape,
        sigma: s.0,
        u_sigma: panel.areal_density_u.map(|u| u.0),
        u_size: panel.size_u.map(|u| u.0),
        air_loaded: f.model == FitModel::AirLoaded,
        frequencies_hz: &freqs,
        modes: &labels,
        u_fit: t.standard_uncertainty,
        calibration: calibration_term,
    });
    (Some(b), calibration_term)
}

/// Warns when the median SNR of the matched modes is low.
pub fn snr_warning(modes: &[ModeRow], warnings: &mut Vec<Warning>) {
    let mut s: Vec<f64> = modes.iter().map(|m| m.snr_db).collect();
    s.sort_by(f64::total_cmp);
    if let Some(&snr) = s.get(s.len() / 2) {
        if snr < quality::LOW_SNR_DB {
            warnings.push(Warning::LowSnr { median_snr_db: snr });
        }
    }
}

/// The strongest partials the labelling leaves unexplained: (frequency,
/// whether it is the very strongest).
pub fn strong_unexplained(parts: &[Partial], unmatched: &[usize]) -> Vec<(f64, bool)> {
    let mut by_level: Vec<usize> = (0..parts.len()).collect();
    by_level.sort_by(|&a, &b| parts[b].level_db.total_cmp(&parts[a].level_db));
    by_level
        .iter()
        .take(quality::STRONG_PARTIALS)
        .enumerate()
        .filter(|(_, i)| unmatched.contains(i))
        .map(|(rank, &i)| (parts[i].frequency_hz, rank == 0))
        .collect()
}

/// Nothing in a membrane sounds below its lowest mode: a fundamental (the
/// lowest partial near the strongest) well below the fitted lowest mode
/// says the labelling or the model is wrong. And the lowest mode has no
/// nodal line inside the membrane, so every tap and pickup off the edge
/// sound it: a fit whose lowest mode has no partial, with the fundamental
/// far above it, has the wrong wave speed.
pub fn lowest_mode_checks(
    f: &FitResult,
    lines: &[ModeLine],
    modes: &[ModeRow],
    parts: &[Partial],
    min_frequency_hz: f64,
    warnings: &mut Vec<Warning>,
) {
    let Some(f0) = crate::fitting::diagnosis::fundamental(parts) else {
        return;
    };
    let lowest = lines
        .iter()
        .map(|l| (fit::predicted_hz(f, l.factor, l.labels[0]), l))
        .min_by(|a, b| a.0.total_cmp(&b.0));
    let Some((f_low, line)) = lowest else {
        return;
    };
    let lowest_matched = modes.iter().any(|r| r.labels == line.label_text());
    let above = CENTS_PER_LN * (f0 / f_low).ln();
    if !lowest_matched && above > 200.0 && f_low >= min_frequency_hz {
        warnings.push(Warning::ModelMisfit {
            detail: format!(
                "the fitted lowest mode {} at {f_low:.1} Hz, which any tap off the edge sounds, has no partial, and the fundamental is at {f0:.1} Hz; the labelling or the model is wrong",
                line.label_text()
            ),
        });
    }
    let below = CENTS_PER_LN * (f_low / f0).ln();
    if below > matching::MATCH_GATE_CENTS {
        warnings.push(Warning::ModelMisfit {
            detail: format!(
                "the fundamental at {f0:.1} Hz (the lowest partial within {} dB of the strongest) lies below the fitted lowest mode {} at {f_low:.1} Hz, where a membrane has nothing to sound; the labelling or the model is wrong",
                crate::fitting::diagnosis::FUNDAMENTAL_WITHIN_DB,
                line.label_text()
            ),
        });
    }
}

/// Uneven tension from the split pairs on degenerate lines: on a circle
/// every resolved (m ≥ 1) pair, on a square panel the (m,n)/(n,m) pairs
/// ([`crate::physics::evenness`]). Outliers are left out.
pub fn evenness_of(panel: &Panel, modes: &[ModeRow]) -> Option<crate::physics::evenness::Evenness> {
    let pairs: Vec<crate::physics::evenness::PairInput> = modes
        .iter()
        .filter(|r| r.degeneracy >= 2 && !r.outlier)
        .filter_map(|r| {
            let p = r.pair?;
            Some(crate::physics::evenness::PairInput::new(
                r.m,
                r.n,
                p.lower.frequency_hz,
                p.lower.frequency_u_hz,
                p.upper.frequency_hz,
                p.upper.frequency_u_hz,
            ))
        })
        .collect();
    if pairs.is_empty() {
        return None;
    }
    match panel.shape {
        Shape::Circle { .. } => crate::physics::evenness::circle_evenness(&pairs),
        Shape::Rectangle { width, height } if (width.0 - height.0).abs() < 1e-9 * width.0 => {
            crate::physics::evenness::square_evenness(&pairs)
        }
        Shape::Rectangle { .. } => None,
    }
}
