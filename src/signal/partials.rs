//! Partials: the peaks of the tap spectrum, with frequency, level, SNR and
//! decay, and the mains hum set aside.
//!
//! Conventions: spectra as in [`crate::signal::spectrum`] (one-sided, dB re a
//! full-scale sine). SNR is the peak power over the local noise-floor mean
//! power, in dB. Decay is measured on a short-time Fourier transform of the
//! span and given as a level decay rate in dB/s; T60 = 60 dB / rate, the
//! amplitude time constant τ = 20/(rate·ln 10) and Q = π·f·τ.

use crate::base::warning::Warning;
use crate::signal::recording::Recording;
use crate::signal::spectrum::{self, Spectrum};
use crate::signal::tap::{self, TapSpan};
use realfft::RealFftPlanner;
use serde::Serialize;

/// Default minimum SNR of a partial, dB.
pub const DEFAULT_MIN_SNR_DB: f64 = 10.0;
/// Default minimum topographic prominence of a partial, dB.
pub const DEFAULT_MIN_PROMINENCE_DB: f64 = 6.0;
/// Peaks more than this far below the strongest are dropped, dB: the
/// analysis window leaves sidelobe ripple from about 65 dB down, and
/// no mode that weak carries weight in a fit.
pub const DYNAMIC_RANGE_DB: f64 = 60.0;
/// Default lowest frequency searched, Hz.
pub const DEFAULT_MIN_FREQUENCY_HZ: f64 = 20.0;
/// Partials kept by frequency beside the strongest [`DEFAULT_MAX_PARTIALS`]:
/// the lowest this many that pass the tests.
pub const LOW_PARTIALS_KEPT: usize = 24;
/// The low partials kept beside the strongest stand within this many dB
/// of the strongest: modes a person sees beside the loud ones, not the
/// noise floor's ripple under a dense spectrum.
pub const LOW_PARTIALS_RANGE_DB: f64 = 30.0;
/// Default largest number of partials kept (the strongest).
pub const DEFAULT_MAX_PARTIALS: usize = 48;
/// A partial is a hum candidate within this distance (Hz) of k·mains/k, i.e.
/// |f/k − mains| below it. Grids hold their frequency within ±0.2 Hz in
/// normal operation (common practice; e.g. the European grid's ±200 mHz
/// normal band).
pub const HUM_TOLERANCE_HZ: f64 = 0.25;
/// Highest mains harmonic considered.
pub const HUM_MAX_HARMONIC: u32 = 40;
/// A partial decaying slower than this (dB/s) is "sustained".
pub const SUSTAINED_DECAY_DB_PER_S: f64 = 3.0;

/// Settings of the partial finder.
#[derive(Debug, Clone)]
pub struct AnalysisConfig {
    /// Minimum SNR, dB.
    pub min_snr_db: f64,
    /// Minimum prominence, dB.
    pub min_prominence_db: f64,
    /// Lowest frequency searched, Hz.
    pub min_frequency_hz: f64,
    /// Highest frequency searched, Hz (None: 95 % of Nyquist).
    pub max_frequency_hz: Option<f64>,
    /// Largest number of partials kept.
    pub max_partials: usize,
    /// Mains frequencies whose families are recognised as hum.
    pub mains_hz: Vec<f64>,
    /// Refine every partial with the damped-sinusoid estimator (frequency
    /// uncertainty, decay from the fit, split pairs); off leaves the FFT
    /// peaks and STFT decays.
    pub refine: bool,
}

impl Default for AnalysisConfig {
    fn default() -> Self {
        AnalysisConfig {
            min_snr_db: DEFAULT_MIN_SNR_DB,
            min_prominence_db: DEFAULT_MIN_PROMINENCE_DB,
            min_frequency_hz: DEFAULT_MIN_FREQUENCY_HZ,
            max_frequency_hz: None,
            max_partials: DEFAULT_MAX_PARTIALS,
            mains_hz: vec![50.0, 60.0],
            refine: true,
        }
    }
}

/// One measured partial.
#[derive(Debug, Clone, Serialize, Default)]
pub struct Partial {
    /// Frequency, Hz.
    pub frequency_hz: f64,
    /// Peak level, dB re a full-scale sine.
    pub level_db: f64,
    /// Peak power over the local noise floor, dB.
    pub snr_db: f64,
    /// Topographic prominence of the peak, dB.
    pub prominence_db: f64,
    /// Level decay rate, dB/s (positive for a decaying partial); None when
    /// too few frames stand above the noise to measure it.
    pub decay_rate_db_per_s: Option<f64>,
    /// Time to decay by 60 dB, s.
    pub t60_s: Option<f64>,
    /// Quality factor π·f·τ.
    pub q: Option<f64>,
    /// How the frequency and decay were obtained.
    pub method: FrequencyMethod,
    /// Standard uncertainty of the frequency, Hz (the damped-sinusoid
    /// fit's inverse Fisher information; for a pair, of the pair's mean).
    /// None for an FFT-peak estimate.
    pub frequency_u_hz: Option<f64>,
    /// Cramér–Rao bound of the frequency of an isolated damped sinusoid
    /// with this partial's amplitude and decay, Hz.
    pub crlb_hz: Option<f64>,
    /// Standard uncertainty of the decay rate, dB/s.
    pub decay_rate_u_db_per_s: Option<f64>,
    /// Initial amplitude, in full-scale units (1 = a full-scale sine).
    pub amplitude: Option<f64>,
    /// Two members of nearly equal frequency resolved within one peak:
    /// the frequency above is then their mean.
    pub pair: Option<SplitPair>,
}

/// How a partial's frequency was measured.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Default)]
#[serde(rename_all = "snake_case")]
pub enum FrequencyMethod {
    /// FFT peak with log-parabola interpolation, STFT decay.
    #[default]
    FftPeak,
    /// Damped-sinusoid fit ([`crate::signal::estimator`]).
    DampedFit,
}

/// One member of a split pair.
#[derive(Debug, Clone, Copy, Serialize)]
pub struct PairMember {
    /// Frequency, Hz.
    pub frequency_hz: f64,
    /// Its standard uncertainty, Hz.
    pub frequency_u_hz: f64,
    /// Its Cramér–Rao bound, Hz.
    pub crlb_hz: f64,
    /// Level decay rate, dB/s.
    pub decay_rate_db_per_s: f64,
    /// T60, s.
    pub t60_s: f64,
    /// Initial level, dB re a full-scale sine.
    pub level_db: f64,
}

/// A split pair: two partials closer than the peak picker could separate,
/// as a degenerate mode pair splits under uneven tension.
#[derive(Debug, Clone, Copy, Serialize)]
pub struct SplitPair {
    /// The lower member.
    pub lower: PairMember,
    /// The upper member.
    pub upper: PairMember,
    /// Upper minus lower, Hz.
    pub splitting_hz: f64,
    /// Its standard uncertainty, Hz (members taken as uncorrelated).
    pub splitting_u_hz: f64,
    /// 1200·log2(upper/lower), cents.
    pub splitting_cents: f64,
    /// Its standard uncertainty, cents.
    pub splitting_u_cents: f64,
}

impl SplitPair {
    fn new(lower: PairMember, upper: PairMember) -> Self {
        let d = upper.frequency_hz - lower.frequency_hz;
        let u = lower.frequency_u_hz.hypot(upper.frequency_u_hz);
        let cents = 1200.0 * (upper.frequency_hz / lower.frequency_hz).log2();
        let cents_per_hz =
            1200.0 / std::f64::consts::LN_2 / (0.5 * (upper.frequency_hz + lower.frequency_hz));
        SplitPair {
            lower,
            upper,
            splitting_hz: d,
            splitting_u_hz: u,
            splitting_cents: cents,
            splitting_u_cents: u * cents_per_hz,
        }
    }
}

/// A partial set aside as mains hum.
#[derive(Debug, Clone, Serialize)]
pub struct HumLine {
    /// The partial.
    pub partial: Partial,
    /// Mains frequency of its family, Hz.
    pub mains_hz: f64,
    /// Harmonic number.
    pub harmonic: u32,
}

/// Everything the partial finder learned from one recording.
#[derive(Debug, Clone)]
pub struct PartialAnalysis {
    /// Where the tap is.
    pub tap: TapSpan,
    /// The spectrum of the analysed span.
    pub spectrum: Spectrum,
    /// Partials of the tap, sorted by frequency.
    pub partials: Vec<Partial>,
    /// Lines set aside as hum.
    pub hum: Vec<HumLine>,
    /// Warnings from reading and analysis.
    pub warnings: Vec<Warning>,
    /// Sample rate, Hz.
    pub sample_rate_hz: f64,
}

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
fn hum_family(
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
struct Saddles {
    block_max: Vec<f64>,
    block_min: Vec<f64>,
}

/// Bins per block of [`Saddles`].
const PROMINENCE_BLOCK: usize = 64;

impl Saddles {
    fn of(p: &[f64]) -> Self {
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
    fn saddle(&self, p: &[f64], k: usize, left: bool) -> f64 {
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
    fn prominence_db(&self, p: &[f64], k: usize) -> f64 {
        let saddle = self.saddle(p, k, true).max(self.saddle(p, k, false));
        10.0 * (p[k] / saddle.max(1e-300)).log10()
    }
}

/// Measures each partial's decay on a short-time Fourier transform of the
/// span: the level at the partial's frequency per frame, fitted by a
/// straight line in dB against time from the strongest frame until the
/// level nears the noise.
fn measure_decays(
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

/// Pencil samples per band when `fit` refines its modes: half the
/// estimator's default, for speed (a fit has many modes and is run on
/// every panel of a batch); `tonus partials` uses the full
/// [`crate::signal::estimator::MAX_PENCIL_SAMPLES`].
pub const FIT_PENCIL_SAMPLES: usize = 48;
/// Widest band searched around an FFT peak by the estimator, Hz.
pub const REFINE_HALF_WIDTH_HZ: f64 = 20.0;
/// A band reaches at most this fraction of the way to the next peak, so
/// neighbouring bands never claim the same component.
pub const REFINE_NEIGHBOUR_FRACTION: f64 = 0.45;
/// Components per band: a single partial or a split pair.
pub const REFINE_MAX_ORDER: usize = 2;
/// The band's components (their power-weighted centre) may lie at most
/// this many FFT resolution bins (1/span) from the peak; farther, the fit
/// has been pulled by something else and the FFT value stands.
pub const REFINE_MAX_SHIFT_BINS: f64 = 0.25;

/// dB per neper: a level decay rate in dB/s is 20/ln 10 times the
/// amplitude decay rate α in 1/s.
const DB_PER_NEPER: f64 = 20.0 / std::f64::consts::LN_10;

/// Refines each FFT peak with the damped-sinusoid estimator
/// ([`crate::signal::estimator`]) on the unwindowed span: frequency with its
/// standard uncertainty and Cramér–Rao bound, decay rate with its
/// uncertainty, amplitude. A band that holds two significant components
/// becomes one partial carrying a [`SplitPair`] (its frequency the
/// members' mean, which is the unsplit mode's to first order in the
/// perturbation that splits it). A band where the fit finds nothing near
/// the peak keeps the FFT estimate.
///
/// `pairs` are partials the peak picker separated that belong to one
/// degenerate line (a split pair): each pair is fitted in one band that
/// holds both members, so that each member's fit models the other — the
/// FFT peak of the weaker member is pulled by the stronger one's skirt by
/// up to about a resolution bin, which a band around that peak alone
/// would read as a pull on the fit and refuse. When the band holds two
/// components, each nearer its own member's peak than the other's, the
/// members take them.
pub fn refine(
    rec: &Recording,
    analysis: &mut PartialAnalysis,
    which: &[usize],
    pairs: &[(usize, usize)],
    pencil_samples: usize,
    planner: &mut RealFftPlanner<f64>,
) {
    use crate::signal::estimator::{BandConfig, SpanAnalyser};
    if (which.is_empty() && pairs.is_empty()) || analysis.partials.is_empty() {
        return;
    }
    let sr = rec.sample_rate_hz;
    let span = &rec.samples[analysis.tap.onset_sample..analysis.tap.end_sample];
    let spectrum = &analysis.spectrum;
    let mut analyser = SpanAnalyser::new_with(span, sr, 0.0, planner);
    analyser.set_pencil_samples(pencil_samples);
    let resolution_hz = sr / analyser.samples_used().max(1) as f64;
    // Every peak bounds its neighbours' bands, hum lines included.
    let mut peaks: Vec<f64> = analysis
        .partials
        .iter()
        .map(|p| p.frequency_hz)
        .chain(analysis.hum.iter().map(|h| h.partial.frequency_hz))
        .collect();
    peaks.sort_by(f64::total_cmp);
    for &(a, b) in pairs {
        let (Some(pa), Some(pb)) = (analysis.partials.get(a), analysis.partials.get(b)) else {
            continue;
        };
        if a == b
            || pa.method == FrequencyMethod::DampedFit
            || pb.method == FrequencyMethod::DampedFit
        {
            continue;
        }
        let (fa, fb) = (pa.frequency_hz, pb.frequency_hz);
        let (lo, hi) = (fa.min(fb), fa.max(fb));
        // The band reaches a resolution bin beyond each member, and not
        // past the way to any other peak.
        let gap = peaks
            .iter()
            .filter(|&&f| f != fa && f != fb)
            .map(|&f| (f - lo).abs().min((f - hi).abs()))
            .fold(f64::INFINITY, f64::min);
        let reach = (2.0 * resolution_hz).min(REFINE_NEIGHBOUR_FRACTION * gap);
        analyser.set_noise_variance(noise_variance_at(spectrum, 0.5 * (lo + hi)));
        let fit = analyser.estimate(&BandConfig {
            centre_hz: 0.5 * (lo + hi),
            half_width_hz: 0.5 * (hi - lo) + reach,
            max_order: 2,
        });
        let mut usable: Vec<_> = fit
            .components
            .iter()
            .filter(|c| c.frequency_u_hz.is_finite() && c.decay_rate_per_s.is_finite())
            .collect();
        // Two components, in frequency order, each nearer its own member's
        // FFT peak than the other's (the weaker member's peak can sit more
        // than a bin off, pulled by the stronger one's skirt); anything
        // else leaves both as they are.
        usable.sort_by(|x, y| x.frequency_hz.total_cmp(&y.frequency_hz));
        let members = if fa <= fb {
            [(a, fa), (b, fb)]
        } else {
            [(b, fb), (a, fa)]
        };
        if usable.len() != 2
            || members
                .iter()
                .zip(&usable)
                .any(|(&(_, f0), c)| (c.frequency_hz - f0).abs() >= 0.5 * (hi - lo))
        {
            continue;
        }
        for (&(i, _), c) in members.iter().zip(&usable) {
            take_component(&mut analysis.partials[i], c);
        }
    }
    for &i in which {
        let Some(p) = analysis.partials.get_mut(i) else {
            continue;
        };
        if p.method == FrequencyMethod::DampedFit {
            continue;
        }
        let f0 = p.frequency_hz;
        let gap = peaks
            .iter()
            .filter(|&&f| f != f0)
            .map(|&f| (f - f0).abs())
            .fold(f64::INFINITY, f64::min);
        // Two resolution bins or four half-widths of the line, whichever
        // is wider: a split pair lies within the peak.
        let line_hwhm = p
            .decay_rate_db_per_s
            .map(|r| r.max(0.0) / DB_PER_NEPER / (2.0 * std::f64::consts::PI))
            .unwrap_or(0.0);
        let half_width = (2.0 * resolution_hz)
            .max(4.0 * line_hwhm)
            .min(REFINE_NEIGHBOUR_FRACTION * gap)
            .min(REFINE_HALF_WIDTH_HZ);
        analyser.set_noise_variance(noise_variance_at(spectrum, f0));
        let fit = analyser.estimate(&BandConfig {
            centre_hz: f0,
            half_width_hz: half_width,
            max_order: REFINE_MAX_ORDER,
        });
        apply_fit(p, &fit.components, resolution_hz);
    }
}

/// Takes the components a band fit found near the FFT peak into the
/// partial (module notes of [`refine`]).
fn apply_fit(
    p: &mut Partial,
    components: &[crate::signal::estimator::DampedComponent],
    resolution_hz: f64,
) {
    let usable: Vec<_> = components
        .iter()
        .filter(|c| c.frequency_u_hz.is_finite() && c.decay_rate_per_s.is_finite())
        .collect();
    // The components must be the FFT peak itself: their power-weighted
    // centre (where the peak of an unresolved pair sits), or the
    // strongest of them, within a quarter of a resolution bin of it. Farther, the fit has been pulled by a
    // neighbour the peak picker did not separate, and the FFT value is
    // the better one (measured on synthetic panels with crowded modes).
    let power: f64 = usable.iter().map(|c| c.amplitude * c.amplitude).sum();
    let centre = usable
        .iter()
        .map(|c| c.amplitude * c.amplitude * c.frequency_hz)
        .sum::<f64>()
        / power.max(1e-300);
    let strongest = usable
        .iter()
        .max_by(|a, b| a.amplitude.total_cmp(&b.amplitude))
        .map(|c| c.frequency_hz);
    let close = |f: f64| (f - p.frequency_hz).abs() <= REFINE_MAX_SHIFT_BINS * resolution_hz;
    // Either the pair's centre is the peak (a pair the peak picker saw as
    // one) or its strongest member is (the peak of one member).
    let locked = !usable.is_empty() && (close(centre) || strongest.is_some_and(close));
    let near: Vec<_> = if locked { usable } else { Vec::new() };
    let member = |c: &crate::signal::estimator::DampedComponent| PairMember {
        frequency_hz: c.frequency_hz,
        frequency_u_hz: c.frequency_u_hz,
        crlb_hz: c.crlb_hz,
        decay_rate_db_per_s: DB_PER_NEPER * c.decay_rate_per_s,
        t60_s: c.t60_s,
        level_db: 20.0 * c.amplitude.max(1e-300).log10(),
    };
    match near.as_slice() {
        [c] => take_component(p, c),
        [a, b] => {
            set_pair(p, member(a), member(b));
            // The pair's decay: the stronger member's.
            let strong = if a.amplitude >= b.amplitude { a } else { b };
            set_decay(p, strong.decay_rate_per_s, strong.decay_rate_u_per_s);
            p.amplitude = Some(a.amplitude.hypot(b.amplitude));
            p.method = FrequencyMethod::DampedFit;
        }
        _ => {}
    }
}

/// The noise variance per sample at `f_hz`, from the spectrum's floor
/// (which is E|X_k|² = σ²·Σw² for white noise of variance σ²).
fn noise_variance_at(spectrum: &Spectrum, f_hz: f64) -> f64 {
    let k = spectrum.bin_of(f_hz).min(spectrum.floor_power.len() - 1);
    spectrum.floor_power[k] / spectrum.window_sq_sum.max(1e-300)
}

/// Makes `p` the single damped component `c`: its frequency with
/// uncertainty and bound, decay, amplitude, method.
fn take_component(p: &mut Partial, c: &crate::signal::estimator::DampedComponent) {
    p.frequency_hz = c.frequency_hz;
    p.frequency_u_hz = Some(c.frequency_u_hz);
    p.crlb_hz = Some(c.crlb_hz);
    set_decay(p, c.decay_rate_per_s, c.decay_rate_u_per_s);
    p.amplitude = Some(c.amplitude);
    p.method = FrequencyMethod::DampedFit;
}

/// Joins two partials that the peak picker separated into one split pair
/// kept at `keep` (its frequency the members' mean, its level their power
/// sum); `absorbed` stays in the list unchanged but belongs to the pair.
/// Members without an uncertainty (FFT-only values) get the pair's
/// frequency uncertainty as None.
pub fn merge_pair(partials: &mut [Partial], keep: usize, absorbed: usize) {
    if keep == absorbed || keep >= partials.len() || absorbed >= partials.len() {
        return;
    }
    let (a, b) = (partials[keep].clone(), partials[absorbed].clone());
    let member = |p: &Partial| PairMember {
        frequency_hz: p.frequency_hz,
        frequency_u_hz: p.frequency_u_hz.unwrap_or(f64::NAN),
        crlb_hz: p.crlb_hz.unwrap_or(f64::NAN),
        decay_rate_db_per_s: p.decay_rate_db_per_s.unwrap_or(f64::NAN),
        t60_s: p.t60_s.unwrap_or(f64::NAN),
        level_db: p
            .amplitude
            .map(|x| 20.0 * x.max(1e-300).log10())
            .unwrap_or(p.level_db),
    };
    let p = &mut partials[keep];
    set_pair(p, member(&a), member(&b));
    p.level_db = 10.0 * (10f64.powf(a.level_db / 10.0) + 10f64.powf(b.level_db / 10.0)).log10();
    p.amplitude = match (a.amplitude, b.amplitude) {
        (Some(x), Some(y)) => Some(x.hypot(y)),
        _ => None,
    };
}

/// Makes `p` the split pair of two members (in either order): its
/// frequency their mean, with the mean's uncertainty and bound (None
/// where a member has none).
fn set_pair(p: &mut Partial, a: PairMember, b: PairMember) {
    let (lo, hi) = if a.frequency_hz <= b.frequency_hz {
        (a, b)
    } else {
        (b, a)
    };
    let mean_u = |x: f64, y: f64| Some(0.5 * x.hypot(y)).filter(|u| u.is_finite());
    p.frequency_hz = 0.5 * (lo.frequency_hz + hi.frequency_hz);
    p.frequency_u_hz = mean_u(lo.frequency_u_hz, hi.frequency_u_hz);
    p.crlb_hz = mean_u(lo.crlb_hz, hi.crlb_hz);
    p.pair = Some(SplitPair::new(lo, hi));
}

/// Sets decay rate, its uncertainty, T60 and Q from an amplitude decay
/// rate α (1/s) and its standard uncertainty.
fn set_decay(p: &mut Partial, alpha: f64, alpha_u: f64) {
    let rate = DB_PER_NEPER * alpha;
    p.decay_rate_db_per_s = Some(rate);
    p.decay_rate_u_db_per_s = Some(DB_PER_NEPER * alpha_u);
    if alpha > 0.0 {
        p.t60_s = Some(60.0 / rate);
        p.q = Some(std::f64::consts::PI * p.frequency_hz / alpha);
    } else {
        p.t60_s = None;
        p.q = None;
    }
}

/// Least-squares straight line y = a·x + b; returns (a, b).
fn line_fit(pts: &[(f64, f64)]) -> (f64, f64) {
    let n = pts.len() as f64;
    let mx = pts.iter().map(|p| p.0).sum::<f64>() / n;
    let my = pts.iter().map(|p| p.1).sum::<f64>() / n;
    let sxx: f64 = pts.iter().map(|p| (p.0 - mx).powi(2)).sum();
    let sxy: f64 = pts.iter().map(|p| (p.0 - mx) * (p.1 - my)).sum();
    let a = if sxx > 0.0 { sxy / sxx } else { 0.0 };
    (a, my - a * mx)
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::f64::consts::PI;
    use std::path::Path;

    /// The prominence by walking from the peak to higher ground on each
    /// side, as its definition reads.
    fn prominence_by_walking(p: &[f64], k: usize) -> f64 {
        let v = p[k];
        let left = p[..k]
            .iter()
            .rev()
            .take_while(|&&x| x <= v)
            .fold(v, |m, &x| m.min(x));
        let right = p[k + 1..]
            .iter()
            .take_while(|&&x| x <= v)
            .fold(v, |m, &x| m.min(x));
        10.0 * (v / left.max(right).max(1e-300)).log10()
    }

    #[test]
    fn block_saddles_equal_the_walk_from_every_bin() {
        let mut rng = crate::physics::synth::Rng::new(41);
        // Ties included: values on a coarse grid.
        let p: Vec<f64> = (0..2000)
            .map(|i| 1.0 + (rng.normal().abs() * 4.0).round() + (i % 97) as f64 * 0.01)
            .collect();
        let s = Saddles::of(&p);
        for k in 0..p.len() {
            assert_eq!(
                s.prominence_db(&p, k),
                prominence_by_walking(&p, k),
                "bin {k}"
            );
        }
    }

    fn tap_signal(sr: f64, parts: &[(f64, f64, f64)], len_s: f64) -> Vec<f64> {
        let n = (len_s * sr) as usize;
        let pre = (0.1 * sr) as usize;
        let mut state = 7u64;
        (0..n)
            .map(|i| {
                state = state
                    .wrapping_mul(6364136223846793005)
                    .wrapping_add(1442695040888963407);
                let noise = ((state >> 11) as f64 / (1u64 << 53) as f64 - 0.5) * 2e-4;
                if i < pre {
                    return noise;
                }
                let t = (i - pre) as f64 / sr;
                noise
                    + parts
                        .iter()
                        .map(|&(f, a, t60)| {
                            a * (-t * 3.0 * std::f64::consts::LN_10 / t60).exp()
                                * (2.0 * PI * f * t).sin()
                        })
                        .sum::<f64>()
            })
            .collect()
    }

    #[test]
    fn decaying_partials_are_found_with_their_decay() {
        let sr = 48000.0;
        let parts = [(180.0, 0.3, 1.2), (287.3, 0.2, 0.8), (411.9, 0.1, 0.5)];
        let x = tap_signal(sr, &parts, 2.0);
        let rec = Recording::from_samples(Path::new("t.wav"), x, sr);
        let a = analyse(&rec, &AnalysisConfig::default()).unwrap();
        assert_eq!(a.partials.len(), 3, "{:?}", a.partials);
        for (p, &(f, _, t60)) in a.partials.iter().zip(&parts) {
            // Tolerances: 0.1 Hz (a quarter of a cent at 400 Hz) allows for
            // the skirt of a stronger neighbour pulling a fast-decaying peak;
            // 10 % on T60 allows for the frame-level fit near the noise.
            assert!(
                (p.frequency_hz - f).abs() < 0.1,
                "{} vs {}",
                p.frequency_hz,
                f
            );
            let t = p.t60_s.unwrap();
            assert!((t / t60 - 1.0).abs() < 0.1, "T60 {t} vs {t60}");
        }
    }

    #[test]
    fn steady_hum_is_set_aside_but_decaying_partial_at_100hz_is_not() {
        let sr = 48000.0;
        let mut x = tap_signal(sr, &[(100.0, 0.3, 0.6), (233.0, 0.2, 0.6)], 2.0);
        for (i, v) in x.iter_mut().enumerate() {
            let t = i as f64 / sr;
            // Hum strong enough to be picked as a partial (about 16 dB
            // below the tap), which is when it must be set aside.
            *v += 0.05 * (2.0 * PI * 50.02 * t).sin() + 0.03 * (2.0 * PI * 150.06 * t).sin();
        }
        let rec = Recording::from_samples(Path::new("t.wav"), x, sr);
        let a = analyse(&rec, &AnalysisConfig::default()).unwrap();
        let hum: Vec<f64> = a.hum.iter().map(|h| h.partial.frequency_hz).collect();
        assert!(hum.iter().any(|f| (f - 50.02).abs() < 0.2), "{hum:?}");
        assert!(hum.iter().any(|f| (f - 150.06).abs() < 0.3), "{hum:?}");
        assert!(a
            .partials
            .iter()
            .any(|p| (p.frequency_hz - 100.0).abs() < 0.1));
        assert!(!hum.iter().any(|f| (f - 100.0).abs() < 1.0));
    }

    #[test]
    fn a_pair_closer_than_the_resolution_is_reported_as_a_pair() {
        let sr = 48000.0;
        // T60 1 s: α = 3·ln 10 = 6.91/s; the members 0.5/τ apart, i.e.
        // 0.5·α/(2π) = 0.55 Hz, while the FFT resolution of the span is
        // about 1 Hz.
        let alpha = 3.0 * std::f64::consts::LN_10;
        let df = 0.5 * alpha / (2.0 * PI);
        let (f1, f2) = (1000.0, 1000.0 + df);
        let x = tap_signal(
            sr,
            &[(f1, 0.2, 1.0), (f2, 0.2, 1.0), (1450.0, 0.2, 0.8)],
            2.0,
        );
        let rec = Recording::from_samples(Path::new("t.wav"), x, sr);
        let a = analyse(&rec, &AnalysisConfig::default()).unwrap();
        let p = a
            .partials
            .iter()
            .find(|p| (p.frequency_hz - 1000.3).abs() < 2.0)
            .expect("the pair's peak");
        let pair = p.pair.expect("resolved into a pair");
        for (m, f) in [(pair.lower, f1), (pair.upper, f2)] {
            assert!(
                (m.frequency_hz - f).abs() < 4.0 * m.frequency_u_hz + 1e-3,
                "{m:?} vs {f}"
            );
            assert!((m.t60_s - 1.0).abs() < 0.1, "{m:?}");
        }
        assert!(
            (pair.splitting_hz - df).abs() < 4.0 * pair.splitting_u_hz + 1e-3,
            "{pair:?}"
        );
        // The isolated partial stays single, with its uncertainty.
        let q = a
            .partials
            .iter()
            .find(|p| (p.frequency_hz - 1450.0).abs() < 1.0)
            .unwrap();
        assert!(q.pair.is_none());
        assert_eq!(q.method, FrequencyMethod::DampedFit);
        let u = q.frequency_u_hz.unwrap();
        assert!((q.frequency_hz - 1450.0).abs() < 4.0 * u, "{q:?}");
        assert!(u > 0.0 && u <= 2.0 * q.crlb_hz.unwrap(), "{q:?}");
    }
}
