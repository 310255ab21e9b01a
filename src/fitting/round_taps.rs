//! The taps of a round: each cut from the recording or stream and fitted
//! through the same pipeline as `tonus fit`, its degenerate lines read
//! into [`TapLines`], and the round concluded into a [`RoundResult`] (the
//! pattern itself is [`crate::fitting::round`]).
//!
//! Conventions: sample indices from the start of the recording or stream;
//! tensions in N/m (or T/σ in m²/s² without an areal density).

use crate::base::estimate::Estimate;
use crate::fitting::round::{lug_deviations, pattern, LineObservation, Pattern, TapLines};
use serde::Serialize;

/// Longest stretch of one tap that is fitted, s (the span
/// [`crate::signal::tap`] analyses at most): a tap is decided once this much of it
/// has been heard, or at the next tap.
pub const TAP_WINDOW_S: f64 = crate::signal::tap::MAX_SPAN_S;
/// Quiet taken before the round's first tap as every tap's background, s.
pub const BACKGROUND_S: f64 = crate::fitting::taps::BACKGROUND_S;
/// Gap left before the next tap's onset, s.
pub const GUARD_S: f64 = crate::fitting::taps::GUARD_S;

/// One tap of a round, fitted.
#[derive(Debug, Clone, Serialize)]
pub struct RoundTap {
    /// Lug number, 1 = the first lug.
    pub lug: usize,
    /// Tap angle, degrees.
    pub angle_deg: f64,
    /// Onset in the recording or stream, s.
    pub onset_s: f64,
    /// Fitted tension (N/m), or T/σ (m²/s²) without areal density.
    pub value: Option<Estimate>,
    /// Grade of the fit.
    pub grade: crate::fitting::quality::Grade,
    /// Modes fitted.
    pub modes: usize,
    /// Degenerate lines heard split in this tap, e.g. "(1,1)".
    pub split_pairs: Vec<String>,
    /// What the tap says about each degenerate line.
    pub lines: TapLines,
}

/// One past the last sample of tap `i`: the next onset less
/// [`GUARD_S`], at most [`TAP_WINDOW_S`] after the onset, at most `len`.
pub fn tap_end(onsets: &[usize], i: usize, rate_hz: f64, len: usize) -> usize {
    let on = onsets[i];
    let window = on + (TAP_WINDOW_S * rate_hz) as usize;
    let next = onsets
        .get(i + 1)
        .map(|&n| n.saturating_sub((GUARD_S * rate_hz) as usize))
        .unwrap_or(usize::MAX);
    window.min(next).min(len).max(on + 1)
}

/// What one fitted tap says about its degenerate lines (circle pairs of
/// order m ≥ 1 on a line of their own).
pub fn tap_lines(m: &crate::fitting::pipeline::Measurement, angle_deg: f64) -> TapLines {
    let lines = m
        .modes
        .iter()
        .filter(|r| r.degeneracy == 2 && r.m >= 1 && !r.outlier)
        .map(|r| {
            let o = match r.pair {
                Some(p) => LineObservation::Split {
                    f_low_hz: p.lower.frequency_hz,
                    f_low_u_hz: p.lower.frequency_u_hz,
                    f_high_hz: p.upper.frequency_hz,
                    f_high_u_hz: p.upper.frequency_u_hz,
                    a_low: 10f64.powf(p.lower.level_db / 20.0),
                    a_high: 10f64.powf(p.upper.level_db / 20.0),
                },
                None => LineObservation::Single {
                    f_hz: r.measured_hz,
                },
            };
            ((r.m, r.n), o)
        })
        .collect();
    TapLines { angle_deg, lines }
}

/// Tap `i` cut as a recording of its own: the [`BACKGROUND_S`] before the
/// first onset (`onsets[0]`), then the samples from its onset to [`tap_end`].
pub fn tap_recording(
    samples: &[f64],
    rate_hz: f64,
    onsets: &[usize],
    i: usize,
    name: &std::path::Path,
) -> crate::signal::recording::Recording {
    let first = onsets[0];
    let bg = ((BACKGROUND_S * rate_hz) as usize).min(first);
    let mut cut = samples[first - bg..first].to_vec();
    cut.extend_from_slice(&samples[onsets[i]..tap_end(onsets, i, rate_hz, samples.len())]);
    crate::signal::recording::Recording::from_samples(name, cut, rate_hz)
}

/// Fits tap `i` of a round: the samples from its onset to [`tap_end`],
/// after the [`BACKGROUND_S`] before the round's first onset
/// (`onsets[0]`), through the same pipeline as `tonus fit` (aspect
/// search off, as for the further taps of a file). The cut depends only
/// on the samples and the onsets, so a stream and a file holding the same
/// audio give the same fit.
///
/// # Errors
/// As [`crate::fitting::pipeline::measure`].
#[allow(clippy::too_many_arguments)]
pub fn measure_tap(
    samples: &[f64],
    rate_hz: f64,
    onsets: &[usize],
    i: usize,
    angle_deg: f64,
    panel: &crate::physics::panel::Panel,
    opts: &crate::fitting::pipeline::FitOptions,
    name: &std::path::Path,
) -> crate::base::error::Result<RoundTap> {
    let rec = tap_recording(samples, rate_hz, onsets, i, name);
    let opts = crate::fitting::pipeline::FitOptions {
        aspect_search: false,
        ..opts.clone()
    };
    let m = crate::fitting::pipeline::measure(&rec, panel, &opts)?;
    let lines = tap_lines(&m, angle_deg);
    Ok(RoundTap {
        lug: i + 1,
        angle_deg,
        onset_s: onsets[i] as f64 / rate_hz,
        value: m.tension.or(m.tension_over_density),
        grade: m.quality.grade,
        modes: m.fit.as_ref().map(|f| f.n_used).unwrap_or(0),
        split_pairs: lines
            .lines
            .iter()
            .filter(|(_, o)| matches!(o, LineObservation::Split { .. }))
            .map(|((a, b), _)| format!("({a},{b})"))
            .collect(),
        lines,
    })
}

/// A whole round: its taps, the mean tension and the pattern.
#[derive(Debug, Clone, Serialize)]
pub struct RoundResult {
    /// Every tap in lug order.
    pub taps: Vec<RoundTap>,
    /// Mean over the taps graded sound or fair (N/m, or m²/s²).
    pub mean: Option<Estimate>,
    /// "N/m" or "m2/s2".
    pub unit: &'static str,
    /// The tension pattern.
    pub pattern: Pattern,
    /// Taps left out of the pattern, with why.
    pub left_out: Vec<String>,
}

/// Concludes a round from its fitted taps. Taps graded doubtful or unfit
/// are left out of the mean and of the pattern (their pairs may be
/// mislabelled) and named in `left_out`.
pub fn conclude(taps: Vec<RoundTap>, unit: &'static str) -> RoundResult {
    use crate::fitting::quality::Grade;
    let good: Vec<&RoundTap> = taps.iter().filter(|t| t.grade < Grade::Doubtful).collect();
    let left_out = taps
        .iter()
        .filter(|t| t.grade >= Grade::Doubtful)
        .map(|t| {
            format!(
                "lug {} ({:.0}°): fit graded {}",
                t.lug,
                t.angle_deg,
                t.grade.name()
            )
        })
        .collect();
    let values: Vec<Estimate> = good.iter().filter_map(|t| t.value).collect();
    let mut lines: Vec<TapLines> = good.iter().map(|t| t.lines.clone()).collect();
    // The lug angles of every lug (left-out ones too) decide the
    // deviations; a left-out tap contributes no observation.
    let all_angles: Vec<f64> = taps.iter().map(|t| t.angle_deg).collect();
    for t in taps.iter().filter(|t| t.grade >= Grade::Doubtful) {
        lines.push(TapLines {
            angle_deg: t.angle_deg,
            lines: Vec::new(),
        });
    }
    let mut pattern = pattern(&lines);
    if pattern.lugs.is_some() {
        pattern.lugs = lug_deviations(&all_angles, &pattern.orders);
    }
    RoundResult {
        taps,
        mean: mean_tension(&values),
        unit,
        pattern,
        left_out,
    }
}

/// The mean tension over the taps, for converting % to N/m.
pub fn mean_tension(values: &[Estimate]) -> Option<Estimate> {
    if values.is_empty() {
        return None;
    }
    let n = values.len() as f64;
    let mean = values.iter().map(|e| e.value).sum::<f64>() / n;
    let u_fit = values
        .iter()
        .map(|e| e.standard_uncertainty.powi(2))
        .sum::<f64>()
        .sqrt()
        / n;
    let s = if values.len() >= 2 {
        (values.iter().map(|e| (e.value - mean).powi(2)).sum::<f64>() / (n - 1.0)).sqrt()
    } else {
        0.0
    };
    Some(Estimate {
        value: mean,
        standard_uncertainty: u_fit.max(s / n.sqrt()),
    })
}
