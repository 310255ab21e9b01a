//! Several taps in one recording: each is cut out and fitted on its own,
//! the good ones are combined, and the tap-to-tap scatter is reported as
//! repeatability.
//!
//! Each tap is analysed with the quiet before the first tap as its
//! background (the quiet between taps is full of the previous tap's
//! decay). A tap is left out, with its reason, when its fit is graded
//! doubtful or unfit, or when its tension lies more than
//! [`crate::base::estimate::OUTLIER_MADS`] scaled median absolute deviations (and more than
//! [`OUTLIER_MIN_REL`] relative) from the median of the taps — a mis-hit on
//! the frame or a double bounce. The kept tensions are combined by the
//! inverse-variance weighted mean; its standard uncertainty is the larger
//! of the weighted-mean uncertainty 1/√(Σ1/uᵢ²) and the repeatability
//! s/√n (s the sample standard deviation of the kept taps), so the result
//! never claims more than the taps agree on (the Birge-ratio idea; R. T.
//! Birge, Phys. Rev. 40, 1932).

use crate::base::estimate::{outlier_limit, Estimate};
use crate::fitting::quality::Grade;
use serde::Serialize;

/// Smallest relative deviation counted as an outlier.
pub const OUTLIER_MIN_REL: f64 = 0.005;
/// Longest background taken before the first tap, s.
pub const BACKGROUND_S: f64 = 0.5;
/// Gap left before the next tap's onset, s.
pub const GUARD_S: f64 = 0.005;

/// One tap's result.
#[derive(Debug, Clone, Serialize)]
pub struct TapResult {
    /// Onset in the file, s.
    pub onset_s: f64,
    /// Fitted tension (N/m), or T/σ (m²/s²) without areal density.
    pub value: Option<Estimate>,
    /// Grade of its fit.
    pub grade: Grade,
    /// Modes fitted.
    pub modes: usize,
    /// Kept in the combination.
    pub kept: bool,
    /// Why it was left out.
    pub reason: Option<String>,
}

/// The combination over taps.
#[derive(Debug, Clone, Serialize)]
pub struct TapSeries {
    /// Every tap.
    pub taps: Vec<TapResult>,
    /// Combined value (N/m or m²/s², as the taps).
    pub combined: Option<Estimate>,
    /// Sample standard deviation of the kept taps (repeatability).
    pub repeatability: Option<f64>,
    /// Unit of the values.
    pub unit: &'static str,
}

/// Flags outliers and combines the kept taps.
pub fn combine(mut taps: Vec<TapResult>, unit: &'static str) -> TapSeries {
    for t in taps.iter_mut() {
        if t.value.is_none() || t.grade >= Grade::Doubtful {
            t.kept = false;
            t.reason = Some(format!("fit graded {}", t.grade.name()));
        }
    }
    let mut vals: Vec<f64> = taps
        .iter()
        .filter(|t| t.kept)
        .filter_map(|t| t.value.map(|v| v.value))
        .collect();
    vals.sort_by(f64::total_cmp);
    if vals.len() >= 3 {
        let med = vals[vals.len() / 2];
        let limit = outlier_limit(&vals, 0.0)
            .map_or(0.0, |(_, l)| l)
            .max(OUTLIER_MIN_REL * med.abs());
        for t in taps.iter_mut().filter(|t| t.kept) {
            if let Some(v) = t.value {
                if (v.value - med).abs() > limit {
                    t.kept = false;
                    t.reason = Some(format!(
                        "{:.1} % from the median of the taps (a mis-hit or a double bounce?)",
                        100.0 * (v.value / med - 1.0)
                    ));
                }
            }
        }
    }
    let kept: Vec<Estimate> = taps
        .iter()
        .filter(|t| t.kept)
        .filter_map(|t| t.value)
        .collect();
    let (combined, repeatability) = if kept.is_empty() {
        (None, None)
    } else {
        let w: Vec<f64> = kept
            .iter()
            .map(|e| 1.0 / e.standard_uncertainty.max(1e-300).powi(2))
            .collect();
        let sw: f64 = w.iter().sum();
        let mean = kept.iter().zip(&w).map(|(e, w)| e.value * w).sum::<f64>() / sw;
        let n = kept.len() as f64;
        let rep = if kept.len() >= 2 {
            let m = kept.iter().map(|e| e.value).sum::<f64>() / n;
            Some((kept.iter().map(|e| (e.value - m).powi(2)).sum::<f64>() / (n - 1.0)).sqrt())
        } else {
            None
        };
        let u = (1.0 / sw.sqrt()).max(rep.map(|s| s / n.sqrt()).unwrap_or(0.0));
        (
            Some(Estimate {
                value: mean,
                standard_uncertainty: u,
            }),
            rep,
        )
    };
    TapSeries {
        taps,
        combined,
        repeatability,
        unit,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn tap(v: f64, u: f64, grade: Grade) -> TapResult {
        TapResult {
            onset_s: 0.0,
            value: Some(Estimate {
                value: v,
                standard_uncertainty: u,
            }),
            grade,
            modes: 10,
            kept: true,
            reason: None,
        }
    }

    #[test]
    fn mis_hit_is_left_out_and_combination_is_tighter() {
        let taps = vec![
            tap(2000.0, 2.0, Grade::Sound),
            tap(2001.0, 2.0, Grade::Sound),
            tap(1999.5, 2.5, Grade::Sound),
            tap(2600.0, 3.0, Grade::Sound),
            tap(2000.5, 2.0, Grade::Fair),
        ];
        let s = combine(taps, "N/m");
        assert!(!s.taps[3].kept);
        assert!(s.taps[3].reason.as_deref().unwrap().contains("median"));
        assert_eq!(s.taps.iter().filter(|t| t.kept).count(), 4);
        let c = s.combined.unwrap();
        assert!((c.value - 2000.2).abs() < 1.0);
        assert!(c.standard_uncertainty < 2.0);
    }

    #[test]
    fn doubtful_tap_is_left_out() {
        let s = combine(
            vec![
                tap(2000.0, 2.0, Grade::Sound),
                tap(2100.0, 2.0, Grade::Doubtful),
            ],
            "N/m",
        );
        assert!(!s.taps[1].kept);
        assert!((s.combined.unwrap().value - 2000.0).abs() < 1e-9);
    }
}
