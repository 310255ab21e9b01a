//! Fit quality: a grade a person can act on, with the reasons for it.
//!
//! Grades, best first: `sound` (use the number), `fair` (usable, read the
//! reasons), `doubtful` (do not decide on it alone; tap again), `unfit`
//! (no tension could be determined). The grade is the worst that any one
//! reason gives.

use crate::base::warning::Warning;
use crate::fitting::fit::FitResult;
use crate::fitting::matching::Matching;
use crate::fitting::rows::ModeRow;
use serde::Serialize;

/// RMS residual above which a fit is only fair, cents.
pub const FAIR_RMS_CENTS: f64 = 8.0;
/// RMS residual above which a fit is doubtful, cents.
pub const DOUBTFUL_RMS_CENTS: f64 = 30.0;
/// Median SNR below which the partials are called weak, dB.
pub const LOW_SNR_DB: f64 = 20.0;
/// Clipped fraction above which a fit is doubtful.
pub const DOUBTFUL_CLIPPED_FRACTION: f64 = 0.01;
/// Trend across the band (cents) above which residuals are systematic.
pub const TREND_CENTS: f64 = 10.0;

/// Quality grade.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Grade {
    /// Use the number.
    Sound,
    /// Usable; read the reasons.
    Fair,
    /// Do not decide on it alone.
    Doubtful,
    /// No tension determined.
    Unfit,
}

impl Grade {
    /// Lower-case name.
    pub fn name(self) -> &'static str {
        match self {
            Grade::Sound => "sound",
            Grade::Fair => "fair",
            Grade::Doubtful => "doubtful",
            Grade::Unfit => "unfit",
        }
    }
}

/// A grade with its reasons.
#[derive(Debug, Clone, Serialize)]
pub struct Quality {
    /// The grade.
    pub grade: Grade,
    /// Why it is not better (empty for a sound fit).
    pub reasons: Vec<String>,
}

/// The strongest partials (by level) that the labelling is expected to
/// explain ([`grade`]).
pub const STRONG_PARTIALS: usize = 5;

/// Grades a fit. `strong_unexplained` lists the partials among the
/// [`STRONG_PARTIALS`] strongest that no mode explains (frequency Hz,
/// whether it is the very strongest): a tap sounds its membrane's modes
/// loudest, so the strongest partial unexplained, or two of the strongest
/// five, say the model or its labelling is wrong (doubtful); one of them
/// may be a rattle or a stand resonance (fair).
pub fn grade(
    fit: Option<&FitResult>,
    matching: Option<&Matching>,
    modes: &[ModeRow],
    warnings: &[Warning],
    clipped_fraction: f64,
    strong_unexplained: &[(f64, bool)],
) -> Quality {
    let Some(f) = fit else {
        return Quality {
            grade: Grade::Unfit,
            reasons: vec!["no partial could be matched to a mode of this membrane".into()],
        };
    };
    let findings: Vec<(Grade, String)> = [
        mode_count(f.n_used),
        residual_size(f.rms_residual_cents),
        matching.is_some_and(|m| m.is_ambiguous()).then(|| {
            (
                Grade::Doubtful,
                "two labellings of the spectrum fit almost equally well".into(),
            )
        }),
        clipping(clipped_fraction),
    ]
    .into_iter()
    .flatten()
    .chain(warnings.iter().filter_map(from_warning))
    .chain(unexplained(strong_unexplained))
    .chain(outlier_share(modes))
    .collect();
    let grade = findings
        .iter()
        .fold(Grade::Sound, |g, (to, _)| if *to > g { *to } else { g });
    Quality {
        grade,
        reasons: findings.into_iter().map(|(_, why)| why).collect(),
    }
}

/// Few modes leave the model unchecked.
fn mode_count(n_used: usize) -> Option<(Grade, String)> {
    match n_used {
        0 => Some((Grade::Unfit, "no mode matched".into())),
        1 => Some((
            Grade::Doubtful,
            "one mode only: its label is assumed and the model cannot be checked".into(),
        )),
        2 => Some((
            Grade::Doubtful,
            "two modes only: one degree of freedom to check the model".into(),
        )),
        3 => Some((Grade::Fair, "three modes only".into())),
        _ => None,
    }
}

/// A large rms residual says the model does not fit.
fn residual_size(rms_cents: f64) -> Option<(Grade, String)> {
    if rms_cents > DOUBTFUL_RMS_CENTS {
        Some((
            Grade::Doubtful,
            format!("the model does not fit: rms residual {rms_cents:.1} cents (over {DOUBTFUL_RMS_CENTS})"),
        ))
    } else if rms_cents > FAIR_RMS_CENTS {
        Some((
            Grade::Fair,
            format!("rms residual {rms_cents:.1} cents (over {FAIR_RMS_CENTS})"),
        ))
    } else {
        None
    }
}

/// Clipped samples distort the partials.
fn clipping(clipped_fraction: f64) -> Option<(Grade, String)> {
    if clipped_fraction > DOUBTFUL_CLIPPED_FRACTION {
        Some((
            Grade::Doubtful,
            format!("{:.1} % of samples clipped", clipped_fraction * 100.0),
        ))
    } else if clipped_fraction > 0.0 {
        Some((
            Grade::Fair,
            format!("{:.3} % of samples clipped", clipped_fraction * 100.0),
        ))
    } else {
        None
    }
}

/// The warnings that lower the grade.
fn from_warning(w: &Warning) -> Option<(Grade, String)> {
    match w {
        Warning::LowSnr { median_snr_db } => Some((
            Grade::Fair,
            format!("low SNR: median {median_snr_db:.1} dB"),
        )),
        Warning::SystematicResidual { detail } => {
            Some((Grade::Fair, format!("systematic residuals: {detail}")))
        }
        Warning::NoOnset => Some((Grade::Fair, "no tap onset found".into())),
        Warning::ModelMisfit { detail } => Some((Grade::Doubtful, detail.clone())),
        _ => None,
    }
}

/// Strong partials no mode explains.
fn unexplained(strong_unexplained: &[(f64, bool)]) -> Option<(Grade, String)> {
    if strong_unexplained.is_empty() {
        return None;
    }
    let list = strong_unexplained
        .iter()
        .map(|(f, _)| format!("{f:.1} Hz"))
        .collect::<Vec<_>>()
        .join(", ");
    let strongest = strong_unexplained.iter().any(|&(_, top)| top);
    if strongest || strong_unexplained.len() >= 2 {
        Some((
            Grade::Doubtful,
            format!(
                "{} of the {STRONG_PARTIALS} strongest partials ({list}){} {} no mode: the model or the labelling is likely wrong",
                strong_unexplained.len(),
                if strongest { ", the strongest among them," } else { "" },
                if strong_unexplained.len() == 1 { "matches" } else { "match" }
            ),
        ))
    } else {
        Some((
            Grade::Fair,
            format!("a strong partial at {list} matches no mode (a rattle, a stand resonance, or a mode the model lacks)"),
        ))
    }
}

/// More than a fifth of the fitted partials left out as outliers.
fn outlier_share(modes: &[ModeRow]) -> Option<(Grade, String)> {
    let outliers = modes.iter().filter(|m| m.outlier).count();
    let fitted = modes.iter().filter(|m| !m.crowded).count();
    (outliers * 5 > fitted.max(1)).then(|| {
        (
            Grade::Fair,
            format!(
                "{outliers} of {} matched partials left out as outliers",
                modes.len()
            ),
        )
    })
}

/// A trend of the residuals with frequency, if it is both significant
/// (|t| > 4 for the slope of residual against log2 frequency) and large
/// (more than [`TREND_CENTS`] across the matched band).
pub fn systematic_trend(modes: &[ModeRow], fit: &FitResult) -> Option<Warning> {
    let pts: Vec<(f64, f64)> = modes
        .iter()
        .filter(|m| !m.outlier && !m.crowded)
        .map(|m| (m.measured_hz.log2(), m.residual_cents))
        .collect();
    if pts.len() < 5 {
        return None;
    }
    let n = pts.len() as f64;
    let mx = pts.iter().map(|p| p.0).sum::<f64>() / n;
    let my = pts.iter().map(|p| p.1).sum::<f64>() / n;
    let sxx: f64 = pts.iter().map(|p| (p.0 - mx).powi(2)).sum();
    if sxx <= 0.0 {
        return None;
    }
    let b = pts.iter().map(|p| (p.0 - mx) * (p.1 - my)).sum::<f64>() / sxx;
    let resid: f64 = pts
        .iter()
        .map(|p| (p.1 - my - b * (p.0 - mx)).powi(2))
        .sum();
    let s2 = resid / (n - 2.0);
    let se = (s2 / sxx).sqrt().max(1e-9);
    let span = pts.iter().map(|p| p.0).fold(f64::MIN, f64::max)
        - pts.iter().map(|p| p.0).fold(f64::MAX, f64::min);
    let _ = fit;
    if (b / se).abs() > 4.0 && (b * span).abs() > TREND_CENTS {
        let dir = if b > 0.0 {
            "higher modes sit sharp of the ideal membrane (bending stiffness, or air loading pulling the low modes down)"
        } else {
            "higher modes sit flat of the ideal membrane"
        };
        Some(Warning::SystematicResidual {
            detail: format!(
                "{:+.1} cents per octave; {dir}; calibrate or use a fuller model",
                b
            ),
        })
    } else {
        None
    }
}
