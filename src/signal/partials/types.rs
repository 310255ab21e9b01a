//! What the partial finder is told ([`AnalysisConfig`]) and what it
//! finds ([`Partial`], [`SplitPair`], [`HumLine`], [`PartialAnalysis`]).

use crate::base::warning::Warning;
use crate::signal::spectrum::Spectrum;
use crate::signal::tap::TapSpan;
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
    pub(super) fn new(lower: PairMember, upper: PairMember) -> Self {
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
