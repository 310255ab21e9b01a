//! Tap detection: where the tap starts, how long its decay is worth
//! analysing, and whether the file holds further taps.
//!
//! Conventions: the short-time energy is computed on frames of
//! [`FRAME_S`] with a hop of half a frame, in dB relative to digital full
//! scale (a full-scale square wave is 0 dB). The onset function is the rise
//! of frame energy over the quietest of the preceding frames, a standard
//! energy-based onset detector (common practice; see Bello et al., "A
//! Tutorial on Onset Detection in Music Signals", IEEE Trans. Speech and
//! Audio Processing 13(5), 2005, section III-A).

use serde::Serialize;

/// Length of an energy frame, in seconds.
pub const FRAME_S: f64 = 0.004;
/// Rise of frame energy (dB) over the recent minimum that marks an onset.
pub const ONSET_RISE_DB: f64 = 10.0;
/// How far the onset frame must stand above the background (dB).
pub const ONSET_ABOVE_FLOOR_DB: f64 = 10.0;
/// A later onset counts as another tap if it exceeds the envelope of the
/// preceding [`RETAP_LOOKBACK_S`] by this much (dB). Beating of close
/// partials never exceeds the preceding envelope, a new tap does.
pub const RETAP_EXCESS_DB: f64 = 6.0;
/// Look-back used for the re-tap test, in seconds.
pub const RETAP_LOOKBACK_S: f64 = 0.05;
/// The analysis span ends when the energy falls to this height above the
/// background (dB).
pub const SPAN_END_ABOVE_FLOOR_DB: f64 = 3.0;
/// Longest span analysed, in seconds.
pub const MAX_SPAN_S: f64 = 1.2;
/// Shortest span analysed when the file holds it, in seconds.
pub const MIN_SPAN_S: f64 = 0.5;
/// The span is lengthened by this factor past the point where the
/// broadband energy meets the background: each partial is narrowband, so
/// its own SNR stays positive well after the broadband level has sunk into
/// the noise (or into steady hum).
pub const SPAN_EXTENSION: f64 = 2.0;

/// Where the tap is and what to analyse.
#[derive(Debug, Clone, Serialize)]
pub struct TapSpan {
    /// First sample of the tap.
    pub onset_sample: usize,
    /// One past the last sample analysed.
    pub end_sample: usize,
    /// Onset time in seconds from the start of the file.
    pub onset_s: f64,
    /// Length of the analysed span in seconds.
    pub span_s: f64,
    /// Peak frame energy of the tap, dB re full scale.
    pub peak_db: f64,
    /// Background (pre-roll and tail) energy, dB re full scale.
    pub background_db: f64,
    /// Onsets of further taps, in seconds from the start of the file.
    pub further_taps_s: Vec<f64>,
    /// False when no distinct onset was found and the whole file is analysed
    /// as a steady sound.
    pub onset_found: bool,
}

/// Finds the first tap and the span to analyse.
pub fn find_tap(samples: &[f64], sample_rate_hz: f64) -> TapSpan {
    let frame = ((FRAME_S * sample_rate_hz).round() as usize).max(8);
    let hop = frame / 2;
    let n = samples.len();
    let n_frames = if n >= frame { (n - frame) / hop + 1 } else { 1 };
    // Onsets are found on the first difference of the signal: a tap's
    // attack is broadband, while hum and other low, steady sound — whose
    // energy in 4 ms frames swings with its phase — is suppressed by
    // 2π·f/fs (−44 dB at 50 Hz and 48 kHz).
    let diff: Vec<f64> = std::iter::once(0.0)
        .chain(samples.windows(2).map(|w| w[1] - w[0]))
        .collect();
    let frames = Frames { n, hop, n_frames };
    // The decay envelope uses the signal itself over 20 ms, a whole period
    // of 50 Hz hum, so that hum reads as a steady background.
    let envelope_db = frames.db(samples, 5 * frame);
    // The quietest tenth of the file is taken as background: the pre-roll
    // and the end of the decay.
    let (background_db, peak_db) = quiet_and_peak(&envelope_db);
    let lookback = ((0.02 * sample_rate_hz) as usize / hop).max(2);
    // The first difference finds the onset under hum. A soft tap (a felt
    // mallet, a 2 ms pulse) has little energy high up, where the
    // difference lifts broadband noise: when the difference shows no
    // onset, the signal's own frame energy is searched the same way.
    let diff_energy = frames.db(&diff, frame);
    let mut found =
        first_onset(&diff_energy, quiet_and_peak(&diff_energy).0, lookback).map(|j| (j, true));
    let mut energy_db = diff_energy;
    if found.is_none() {
        let plain = frames.db(samples, frame);
        found = first_onset(&plain, quiet_and_peak(&plain).0, lookback).map(|j| (j, false));
        if found.is_some() {
            energy_db = plain;
        }
    }
    let (background_onset_db, _) = quiet_and_peak(&energy_db);
    let Some((of, on_diff)) = found else {
        // A steady sound (or noise): analyse everything, capped.
        let end = n.min((MAX_SPAN_S * sample_rate_hz) as usize);
        return TapSpan {
            onset_sample: 0,
            end_sample: end,
            onset_s: 0.0,
            span_s: end as f64 / sample_rate_hz,
            peak_db,
            background_db,
            further_taps_s: vec![],
            onset_found: false,
        };
    };
    let onset_signal: &[f64] = if on_diff { &diff } else { samples };
    let onset_sample = refine_onset(onset_signal, of * hop, frame);

    let retap_back = ((RETAP_LOOKBACK_S * sample_rate_hz) as usize / hop).max(2);
    let further = further_taps(
        &energy_db,
        of + retap_back,
        retap_back,
        background_onset_db + ONSET_ABOVE_FLOOR_DB,
        |j| refine_onset(onset_signal, j * hop, frame),
    );
    let peak_frame = (of..(of + 3 * lookback).min(n_frames))
        .max_by(|&a, &b| envelope_db[a].total_cmp(&envelope_db[b]))
        .unwrap_or(of);
    let limit_sample = further
        .first()
        .map(|&s| s.saturating_sub(hop))
        .unwrap_or(n)
        .min(onset_sample + (MAX_SPAN_S * sample_rate_hz) as usize)
        .min(n);
    let end_sample = span_end(
        &envelope_db,
        &frames,
        frame,
        peak_frame,
        background_db + SPAN_END_ABOVE_FLOOR_DB,
        limit_sample,
    );
    let end_sample = (onset_sample
        + ((end_sample.saturating_sub(onset_sample)) as f64 * SPAN_EXTENSION) as usize)
        .min(limit_sample);
    let min_end = (onset_sample + (MIN_SPAN_S * sample_rate_hz) as usize).min(limit_sample);
    let end_sample = end_sample.max(min_end).min(n);
    TapSpan {
        onset_sample,
        end_sample,
        onset_s: onset_sample as f64 / sample_rate_hz,
        span_s: (end_sample - onset_sample) as f64 / sample_rate_hz,
        peak_db,
        background_db,
        further_taps_s: further.iter().map(|&s| s as f64 / sample_rate_hz).collect(),
        onset_found: true,
    }
}

/// The frame grid of a recording: `n` samples, frames every `hop`.
struct Frames {
    n: usize,
    hop: usize,
    n_frames: usize,
}

impl Frames {
    /// Energy in dB of each frame of `len` samples of `sig`. The energies
    /// come from sums over hop-long blocks (every frame is a whole number
    /// of hops): each sample is squared once, not once per overlapping
    /// frame, and the sums stay exact sums of squares.
    fn db(&self, sig: &[f64], len: usize) -> Vec<f64> {
        let Frames { n, hop, n_frames } = *self;
        let per = if hop > 0 && len.is_multiple_of(hop) {
            len / hop
        } else {
            0
        };
        if per == 0 {
            return (0..n_frames)
                .map(|j| {
                    let s = &sig[(j * hop).min(n)..(j * hop + len).min(n)];
                    let e = s.iter().map(|x| x * x).sum::<f64>() / s.len().max(1) as f64;
                    10.0 * (e + 1e-20).log10()
                })
                .collect();
        }
        let blocks: Vec<f64> = sig
            .chunks(hop)
            .map(|c| c.iter().map(|x| x * x).sum::<f64>())
            .collect();
        (0..n_frames)
            .map(|j| {
                let from = (j * hop).min(n);
                let to = (j * hop + len).min(n);
                let e = blocks[(j).min(blocks.len())..(j + per).min(blocks.len())]
                    .iter()
                    .sum::<f64>()
                    / (to - from).max(1) as f64;
                10.0 * (e + 1e-20).log10()
            })
            .collect()
    }
}

/// The level of the quietest tenth of the frames, and the loudest.
fn quiet_and_peak(v: &[f64]) -> (f64, f64) {
    let mut sorted = v.to_vec();
    sorted.sort_by(f64::total_cmp);
    (
        sorted[sorted.len() / 10],
        *sorted.last().unwrap_or(&sorted[0]),
    )
}

/// Further taps: from frame `from` on, a frame that tops the envelope of
/// the preceding `back` frames by [`RETAP_EXCESS_DB`] and stands above
/// `floor_db`; `onset` places each one to the sample.
fn further_taps(
    energy_db: &[f64],
    from: usize,
    back: usize,
    floor_db: f64,
    onset: impl Fn(usize) -> usize,
) -> Vec<usize> {
    let mut further = Vec::new();
    let mut j = from;
    while j < energy_db.len() {
        let prev_max = energy_db[j - back..j]
            .iter()
            .copied()
            .fold(f64::NEG_INFINITY, f64::max);
        if energy_db[j] > prev_max + RETAP_EXCESS_DB && energy_db[j] > floor_db {
            further.push(onset(j));
            j += back;
        } else {
            j += 1;
        }
    }
    further
}

/// Where the decay falls below `threshold_db` (smoothed over a few frames
/// so a beat minimum does not end the span), from the peak frame on; at
/// most `limit_sample` (the next tap, or the longest span).
fn span_end(
    envelope_db: &[f64],
    frames: &Frames,
    frame: usize,
    peak_frame: usize,
    threshold_db: f64,
    limit_sample: usize,
) -> usize {
    let (hop, n_frames) = (frames.hop, frames.n_frames);
    let smooth = 5usize;
    for jj in peak_frame..n_frames {
        if jj * hop >= limit_sample {
            break;
        }
        let hi = (jj + smooth).min(n_frames);
        let m = envelope_db[jj..hi]
            .iter()
            .copied()
            .fold(f64::NEG_INFINITY, f64::max);
        if m < threshold_db {
            return (jj * hop + frame).min(limit_sample);
        }
    }
    limit_sample
}

/// The first frame whose energy (dB) rises [`ONSET_RISE_DB`] over the
/// quietest of the `lookback` frames before it and stands
/// [`ONSET_ABOVE_FLOOR_DB`] above the background.
fn first_onset(energy_db: &[f64], background_db: f64, lookback: usize) -> Option<usize> {
    (0..energy_db.len()).find(|&j| {
        let recent_min = if j == 0 {
            background_db
        } else {
            energy_db[j.saturating_sub(lookback)..j]
                .iter()
                .copied()
                .fold(f64::INFINITY, f64::min)
        };
        let rise = energy_db[j] - recent_min.min(energy_db[j]);
        energy_db[j] > background_db + ONSET_ABOVE_FLOOR_DB
            && (rise > ONSET_RISE_DB || j == 0 && energy_db[j] > background_db + ONSET_RISE_DB)
    })
}

/// Moves a frame-accurate onset to the first sample that reaches a tenth
/// of the local peak, searching one frame back and two frames on.
fn refine_onset(samples: &[f64], start: usize, frame: usize) -> usize {
    let lo = start.saturating_sub(frame);
    let hi = (start + 2 * frame).min(samples.len());
    if lo >= hi {
        return start;
    }
    let peak = samples[lo..hi].iter().fold(0.0f64, |m, x| m.max(x.abs()));
    samples[lo..hi]
        .iter()
        .position(|x| x.abs() >= 0.1 * peak)
        .map(|p| lo + p)
        .unwrap_or(start)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn decaying_tap(sr: f64, onset_s: f64, len_s: f64, taps: &[f64]) -> Vec<f64> {
        let n = (len_s * sr) as usize;
        let mut x = vec![0.0; n];
        // A fixed-seed pseudo-random background at -70 dB.
        let mut state = 12345u64;
        for v in x.iter_mut() {
            state = state
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            *v = ((state >> 33) as f64 / (1u64 << 31) as f64 - 0.5) * 1e-3;
        }
        for &t0 in std::iter::once(&onset_s).chain(taps) {
            let i0 = (t0 * sr) as usize;
            for (i, v) in x.iter_mut().enumerate().skip(i0) {
                let t = (i - i0) as f64 / sr;
                *v += 0.5 * (-t / 0.15).exp() * (2.0 * std::f64::consts::PI * 220.0 * t).sin();
            }
        }
        x
    }

    #[test]
    fn onset_is_found_after_the_preroll() {
        let sr = 48000.0;
        let x = decaying_tap(sr, 0.2, 1.5, &[]);
        let tap = find_tap(&x, sr);
        assert!(tap.onset_found);
        // Within 1 ms: the sine starts at zero phase, so the first sample
        // above a tenth of the peak comes a fraction of a period later.
        assert!((tap.onset_s - 0.2).abs() < 1e-3, "{}", tap.onset_s);
        assert!(tap.further_taps_s.is_empty());
        // τ = 0.15 s amplitude decay falls 70 dB to the background in about
        // 1.2 s; the span must cover most of it.
        assert!(tap.span_s > 0.8 && tap.span_s <= 1.31, "{}", tap.span_s);
    }

    #[test]
    fn second_tap_is_noticed_and_ends_the_span() {
        let sr = 48000.0;
        let x = decaying_tap(sr, 0.1, 2.0, &[0.9]);
        let tap = find_tap(&x, sr);
        assert_eq!(tap.further_taps_s.len(), 1, "{:?}", tap.further_taps_s);
        assert!((tap.further_taps_s[0] - 0.9).abs() < 2e-3);
        assert!(tap.onset_s + tap.span_s <= 0.9);
    }
}
