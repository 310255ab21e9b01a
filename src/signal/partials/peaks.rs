//! Peak picking (SNR against a false-alarm threshold, prominence,
//! dynamic range) and the decay of each peak on a short-time transform.

use crate::signal::spectrum::{self, Spectrum};
use realfft::RealFftPlanner;

use super::types::*;

/// Local maxima that pass the SNR and prominence tests, refined below the
/// bin spacing.
///
/// Sub-bin refinement: a parabola through the log power of the peak bin and
/// its two neighbours (quadratic interpolation of the log spectrum; J. O.
/// Smith and X. Serra, "PARSHL: An Analysis/Synthesis Program for
/// Non-Harmonic Sounds Based on a Sinusoidal Representation", Proc. ICMC
/// 1987). With bins p₋, p₀, p₊ in dB the offset is
/// δ = ½(p₋ − p₊)/(p₋ − 2p₀ + p₊) bins and the peak level p₀ − ¼(p₋ − p₊)δ.
/// The zero padding of [`spectrum::ZERO_PAD_FACTOR`] keeps its bias far
/// below the bin spacing.
pub fn pick_peaks(spectrum: &Spectrum, fmin: f64, fmax: f64, cfg: &AnalysisConfig) -> Vec<Partial> {
    let pw = &spectrum.power;
    let db = |k: usize| spectrum.power_to_db(pw[k]);
    let nb = pw.len();
    let lo = ((fmin / spectrum.bin_hz).floor() as usize).max(1);
    let hi = ((fmax / spectrum.bin_hz).ceil() as usize).min(nb.saturating_sub(2));
    let mut cands: Vec<Partial> = Vec::new();
    // The padded spectrum is smooth: a peak must top its neighbours over
    // half a resolution bin either side.
    let guard = (spectrum::ZERO_PAD_FACTOR / 2).max(1);
    let min_snr = cfg.min_snr_db.max(false_alarm_snr_db(
        (hi.saturating_sub(lo) / spectrum::ZERO_PAD_FACTOR).max(1),
    ));
    let snr_factor = 10f64.powf(min_snr / 10.0);
    let saddles = Saddles::of(pw);
    for k in lo.max(guard)..hi.min(nb - guard) {
        // Local maximum tests on power (monotonic in dB, and cheaper).
        let v = pw[k];
        if !(v >= pw[k - 1] && v > pw[k + 1]) {
            continue;
        }
        if (1..=guard).any(|g| pw[k - g] > v || pw[k + g] > v) {
            continue;
        }
        // SNR test on power first: most local maxima are noise.
        if v < spectrum.floor_power[k] * snr_factor {
            continue;
        }
        let v = db(k);
        let snr = v - spectrum.floor_db(k);
        if snr < min_snr {
            continue;
        }
        let prom = saddles.prominence_db(pw, k);
        if prom < cfg.min_prominence_db {
            continue;
        }
        let (a, b, c) = (db(k - 1), db(k), db(k + 1));
        let denom = a - 2.0 * b + c;
        let delta = if denom.abs() > 1e-12 {
            (0.5 * (a - c) / denom).clamp(-0.5, 0.5)
        } else {
            0.0
        };
        let level = b - 0.25 * (a - c) * delta;
        cands.push(Partial {
            frequency_hz: (k as f64 + delta) * spectrum.bin_hz,
            level_db: level,
            snr_db: level - spectrum.floor_db(k),
            prominence_db: prom,
            decay_rate_db_per_s: None,
            t60_s: None,
            q: None,
            ..Partial::default()
        });
    }
    cands.sort_by(|a, b| b.level_db.total_cmp(&a.level_db));
    if let Some(top) = cands.first().map(|p| p.level_db) {
        cands.retain(|p| p.level_db >= top - DYNAMIC_RANGE_DB);
    }
    // The strongest `max_partials`, and beside them the lowest
    // LOW_PARTIALS_KEPT: a long or dense panel's many strong high modes
    // must not push out the weaker low ones, which decide the labelling.
    if cands.len() > cfg.max_partials {
        let mut by_freq: Vec<usize> = (0..cands.len()).collect();
        by_freq.sort_by(|&a, &b| cands[a].frequency_hz.total_cmp(&cands[b].frequency_hz));
        let mut keep = vec![false; cands.len()];
        for k in keep.iter_mut().take(cfg.max_partials) {
            *k = true;
        }
        // Only those within LOW_PARTIALS_RANGE_DB of the strongest.
        let top = cands.first().map_or(0.0, |p| p.level_db);
        for &i in by_freq
            .iter()
            .filter(|&&i| cands[i].level_db >= top - LOW_PARTIALS_RANGE_DB)
            .take(LOW_PARTIALS_KEPT)
        {
            keep[i] = true;
        }
        let mut i = 0;
        cands.retain(|_| {
            i += 1;
            keep[i - 1]
        });
    }
    cands
}

/// Probability that any pure-noise bin of the searched band passes the
/// SNR test.
pub const FALSE_ALARM_PROBABILITY: f64 = 0.01;

/// The SNR (dB) that pure noise exceeds in any of `n_independent` bins
/// with probability [`FALSE_ALARM_PROBABILITY`]. The power of a noise bin
/// over its mean is exponentially distributed, so
/// P(any of N exceeds x) ≈ N·e^(−x) and x = ln(N/P) (the periodogram
/// peak test of R. A. Fisher, "Tests of significance in harmonic analysis",
/// Proc. R. Soc. Lond. A 125, 1929, in its large-N form).
pub fn false_alarm_snr_db(n_independent: usize) -> f64 {
    10.0 * ((n_independent as f64 / FALSE_ALARM_PROBABILITY).ln()).log10()
}

/// Block summary of a spectrum for topographic prominence: the highest
/// and lowest power of every [`PROMINENCE_BLOCK`] bins. A walk from a
/// peak to higher ground then crosses whole blocks whose maximum is not
/// above the peak in one step each, and goes bin by bin only in the
/// block where it starts and the one where it stops: O(block + n/block)
/// per peak instead of O(n), for a summary made once in O(n).
pub(super) struct Saddles {
    pub(super) block_max: Vec<f64>,
    pub(super) block_min: Vec<f64>,
}

/// Bins per block of [`Saddles`].
pub(super) const PROMINENCE_BLOCK: usize = 64;

impl Saddles {
    pub(super) fn of(p: &[f64]) -> Self {
        let (block_max, block_min) = p
            .chunks(PROMINENCE_BLOCK)
            .map(|c| {
                c.iter()
                    .fold((f64::NEG_INFINITY, f64::INFINITY), |(hi, lo), &v| {
                        (hi.max(v), lo.min(v))
                    })
            })
            .unzip();
        Saddles {
            block_max,
            block_min,
        }
    }

    /// Lowest power between bin `k` and the nearest strictly higher bin
    /// on one side (`left`: towards bin 0), or the spectrum's end.
    pub(super) fn saddle(&self, p: &[f64], k: usize, left: bool) -> f64 {
        let v = p[k];
        let b = PROMINENCE_BLOCK;
        let mut low = v;
        // Bin by bin to the edge of k's block, then block by block, then
        // bin by bin in the block holding the higher ground.
        let walk = |from: usize, to: usize, low: &mut f64| -> bool {
            // Visits from..to in the walking direction; true when it meets
            // higher ground.
            if left {
                for &x in p[to..from].iter().rev() {
                    if x > v {
                        return true;
                    }
                    *low = low.min(x);
                }
            } else {
                for &x in &p[from..to] {
                    if x > v {
                        return true;
                    }
                    *low = low.min(x);
                }
            }
            false
        };
        let blk = k / b;
        if left {
            if walk(k, blk * b, &mut low) {
                return low;
            }
            for j in (0..blk).rev() {
                if self.block_max[j] > v {
                    walk((j + 1) * b, j * b, &mut low);
                    return low;
                }
                low = low.min(self.block_min[j]);
            }
        } else {
            let end = ((blk + 1) * b).min(p.len());
            if walk(k + 1, end, &mut low) {
                return low;
            }
            for j in blk + 1..self.block_max.len() {
                if self.block_max[j] > v {
                    walk(j * b, ((j + 1) * b).min(p.len()), &mut low);
                    return low;
                }
                low = low.min(self.block_min[j]);
            }
        }
        low
    }

    /// Topographic prominence of the peak at `k`, dB: its height over the
    /// higher of the two lowest points between it and the nearest higher
    /// ground on either side (or the spectrum's end). Works on power.
    pub(super) fn prominence_db(&self, p: &[f64], k: usize) -> f64 {
        let saddle = self.saddle(p, k, true).max(self.saddle(p, k, false));
        10.0 * (p[k] / saddle.max(1e-300)).log10()
    }
}

/// Measures each partial's decay on a short-time Fourier transform of the
/// span: the level at the partial's frequency per frame, fitted by a
/// straight line in dB against time from the strongest frame until the
/// level nears the noise.
pub(super) fn measure_decays(
    span: &[f64],
    sr: f64,
    partials: &mut [Partial],
    planner: &mut RealFftPlanner<f64>,
    spectrum: &Spectrum,
) {
    let n = span.len();
    // At least eight half-overlapping frames, between 256 and 8192 samples.
    let mut frame = 256usize;
    while frame * 2 <= 8192 && (frame * 2) * 9 / 2 <= n {
        frame *= 2;
    }
    if frame > n {
        return;
    }
    let hop = frame / 2;
    let n_frames = (n - frame) / hop + 1;
    if n_frames < 3 {
        return;
    }
    let hann = crate::signal::spectrum::hann(frame);
    let hann_sq: f64 = hann.iter().map(|x| x * x).sum();
    let fft = planner.plan_fft_forward(frame);
    let mut input = fft.make_input_vec();
    let mut output = fft.make_output_vec();
    let bin_hz = sr / frame as f64;
    // levels[p][j]: power at partial p in frame j.
    let mut levels = vec![Vec::with_capacity(n_frames); partials.len()];
    for j in 0..n_frames {
        for (i, v) in input.iter_mut().enumerate() {
            *v = span[j * hop + i] * hann[i];
        }
        // Buffers come from the planner, so processing cannot fail.
        fft.process(&mut input, &mut output)
            .expect("buffers sized by the planner");
        for (p, part) in partials.iter().enumerate() {
            // The nearest bin only: its scalloping loss is the same in
            // every frame, so it does not bias the slope, and a neighbour
            // bin may belong to another partial.
            let k = ((part.frequency_hz / bin_hz).round() as usize).min(output.len() - 1);
            levels[p].push(output[k].norm_sqr());
        }
    }
    let _ = (spectrum, hann_sq);
    for (p, part) in partials.iter_mut().enumerate() {
        // The quietest frame stands for the noise at this frequency (or,
        // for a partial that outlasts the span, its last level); the fit
        // keeps to frames 8 dB above it and within 50 dB of the peak.
        let db: Vec<f64> = levels[p]
            .iter()
            .map(|&x| 10.0 * (x + 1e-300).log10())
            .collect();
        let start = (0..db.len())
            .max_by(|&a, &b| db[a].total_cmp(&db[b]))
            .unwrap_or(0);
        let peak = db[start];
        let quietest = db[start..].iter().copied().fold(f64::INFINITY, f64::min);
        let threshold = if peak - quietest > 12.0 {
            (quietest + 8.0).max(peak - 50.0)
        } else {
            f64::NEG_INFINITY
        };
        let mut pts = Vec::new();
        for (j, &v) in db.iter().enumerate().skip(start) {
            if v < threshold {
                break;
            }
            pts.push(((j * hop + frame / 2) as f64 / sr, v));
        }
        if pts.len() < 3 {
            // The strongest frame came late: a steady line (hum, a machine)
            // whose level wanders, not a decay. Its slope over the whole
            // span says so (near zero), where a tap's partial would have
            // peaked at the start.
            if db.len() >= 3 && start * 2 >= db.len() {
                let all: Vec<(f64, f64)> = db
                    .iter()
                    .enumerate()
                    .map(|(j, &v)| (((j * hop + frame / 2) as f64) / sr, v))
                    .collect();
                part.decay_rate_db_per_s = Some(-line_fit(&all).0);
            }
            continue;
        }
        let (slope, _) = line_fit(&pts);
        let rate = -slope;
        part.decay_rate_db_per_s = Some(rate);
        if rate > 0.0 {
            let t60 = 60.0 / rate;
            let tau = 20.0 / (rate * std::f64::consts::LN_10);
            part.t60_s = Some(t60);
            part.q = Some(std::f64::consts::PI * part.frequency_hz * tau);
        }
    }
}

/// Least-squares straight line y = a·x + b; returns (a, b).
pub(super) fn line_fit(pts: &[(f64, f64)]) -> (f64, f64) {
    let n = pts.len() as f64;
    let mx = pts.iter().map(|p| p.0).sum::<f64>() / n;
    let my = pts.iter().map(|p| p.1).sum::<f64>() / n;
    let sxx: f64 = pts.iter().map(|p| (p.0 - mx).powi(2)).sum();
    let sxy: f64 = pts.iter().map(|p| (p.0 - mx) * (p.1 - my)).sum();
    let a = if sxx > 0.0 { sxy / sxx } else { 0.0 };
    (a, my - a * mx)
}
