//! [`analyse`]: one recording's partials from its tap span, with the
//! hum set aside.

use crate::base::warning::Warning;
use crate::signal::recording::Recording;
use crate::signal::spectrum::{self};
use crate::signal::tap::{self};
use realfft::RealFftPlanner;

use super::peaks::{measure_decays, pick_peaks};
use super::refine::refine;
use super::types::*;

/// Finds the tap and measures its partials.
///
/// # Errors
/// Never fails on a recording that [`crate::signal::recording::read_wav`] accepted;
/// the `Result` leaves room for checks of the configuration.
pub fn analyse(
    rec: &Recording,
    cfg: &AnalysisConfig,
) -> crate::base::error::Result<PartialAnalysis> {
    let mut planner = RealFftPlanner::new();
    analyse_with(rec, cfg, &mut planner)
}

/// As [`analyse`], reusing an FFT planner (batches plan once).
pub fn analyse_with(
    rec: &Recording,
    cfg: &AnalysisConfig,
    planner: &mut RealFftPlanner<f64>,
) -> crate::base::error::Result<PartialAnalysis> {
    let sr = rec.sample_rate_hz;
    let tap = tap::find_tap(&rec.samples, sr);
    let span = &rec.samples[tap.onset_sample..tap.end_sample];
    // Background for the noise floor: everything before the tap, less a
    // guard of 5 ms.
    let guard = (0.005 * sr) as usize;
    let background = (tap.onset_found && tap.onset_sample > guard + spectrum::MIN_NOISE_SAMPLES)
        .then(|| &rec.samples[..tap.onset_sample - guard]);
    let spectrum = spectrum::compute(span, background, sr, planner);
    let mut warnings = Vec::new();
    if rec.clipped_fraction > 0.0 {
        warnings.push(Warning::Clipping {
            fraction: rec.clipped_fraction,
        });
    }
    if !tap.onset_found {
        warnings.push(Warning::NoOnset);
    }
    if !tap.further_taps_s.is_empty() {
        warnings.push(Warning::FurtherTaps {
            onsets_s: tap.further_taps_s.clone(),
        });
    }
    if tap.span_s < 0.1 {
        warnings.push(Warning::ShortSpan { span_s: tap.span_s });
    }
    let fmax = cfg
        .max_frequency_hz
        .unwrap_or(0.95 * sr / 2.0)
        .min(0.95 * sr / 2.0);
    let mut found = pick_peaks(&spectrum, cfg.min_frequency_hz, fmax, cfg);
    measure_decays(span, sr, &mut found, planner, &spectrum);
    found.sort_by(|a, b| a.frequency_hz.total_cmp(&b.frequency_hz));

    // Hum: near a mains harmonic and not decaying with the tap. In a steady
    // recording there is no tap to compare with, so nothing is set aside.
    let mut partials = Vec::new();
    let mut hum = Vec::new();
    for p in found {
        match hum_family(&p, &cfg.mains_hz, spectrum.background.as_ref()) {
            Some((mains, k)) if tap.onset_found => hum.push(HumLine {
                partial: p,
                mains_hz: mains,
                harmonic: k,
            }),
            _ => partials.push(p),
        }
    }
    for &mains in &cfg.mains_hz {
        let f: Vec<f64> = hum
            .iter()
            .filter(|h| h.mains_hz == mains)
            .map(|h| h.partial.frequency_hz)
            .collect();
        if !f.is_empty() {
            warnings.push(Warning::Hum {
                mains_hz: mains,
                frequencies_hz: f,
            });
        }
    }
    let mut analysis = PartialAnalysis {
        tap,
        spectrum,
        partials,
        hum,
        warnings,
        sample_rate_hz: sr,
    };
    if cfg.refine {
        let all: Vec<usize> = (0..analysis.partials.len()).collect();
        refine(
            rec,
            &mut analysis,
            &all,
            &[],
            crate::signal::estimator::MAX_PENCIL_SAMPLES,
            planner,
        );
    }
    Ok(analysis)
}

/// A steady line must stand this far above the background's own noise
/// (dB), so that a weak partial near the noise is not mistaken for one.
pub const STEADY_ABOVE_NOISE_DB: f64 = 10.0;

/// Level (dB) within which a line already sounding before the tap counts
/// as steady: a partial of the tap is absent from the background.
pub const STEADY_LEVEL_DB: f64 = 6.0;

/// The mains family a steady partial belongs to, if any. Steady means
/// present in the background before the tap at nearly its level, or, with
/// no background to compare, not decaying.
pub(super) fn hum_family(
    p: &Partial,
    mains: &[f64],
    background: Option<&spectrum::Background>,
) -> Option<(f64, u32)> {
    let sustained = match (background, p.decay_rate_db_per_s) {
        (Some(b), rate) => {
            let line = b.level_near(p.frequency_hz);
            (line >= p.level_db - STEADY_LEVEL_DB
                && line >= b.noise_level_near(p.frequency_hz) + STEADY_ABOVE_NOISE_DB)
                // A background too short to resolve a low line still
                // leaves its steadiness to say so.
                || rate.is_some_and(|r| r.abs() < SUSTAINED_DECAY_DB_PER_S)
        }
        (None, Some(r)) => r < SUSTAINED_DECAY_DB_PER_S,
        (None, None) => false,
    };
    if !sustained {
        return None;
    }
    for &m in mains {
        let k = (p.frequency_hz / m).round();
        if k >= 1.0
            && k <= HUM_MAX_HARMONIC as f64
            && (p.frequency_hz / k - m).abs() < HUM_TOLERANCE_HZ
        {
            return Some((m, k as u32));
        }
    }
    None
}
