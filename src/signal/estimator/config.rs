//! The estimator's constants and the types it reports.

use nalgebra::Complex;
use serde::Serialize;

/// A complex number of `f64`.
pub(super) type C64 = Complex<f64>;

/// Largest number of band samples in the matrix pencil: its SVD costs
/// O(M³), and the pencil only starts the fit, so more samples buy little.
pub const MAX_PENCIL_SAMPLES: usize = 96;
/// Fewest band samples for which the pencil is tried; below it the fit
/// starts from the spectral peak alone.
pub const MIN_PENCIL_SAMPLES: usize = 12;
/// Shortest span analysed, samples.
pub const MIN_SPAN_SAMPLES: usize = 64;
/// Longest stretch of the span analysed, samples (5.5 s at 48 kHz): the
/// cost of the one FFT per span grows with it, and a partial still
/// sounding after that is measured well enough.
pub const MAX_SPAN_SAMPLES: usize = 1 << 18;
/// A side of a peak that rises again by this factor in power over its
/// lowest point (before falling to half power) has met a neighbouring
/// peak ([`SpanAnalyser`]'s half-power width).
pub const VALLEY_RISE: f64 = 1.25;
/// Poles beyond `max_order` the pencil may use for neighbours that fall
/// inside its window but outside the band.
pub const EXTRA_PENCIL_ORDER: usize = 4;
/// The fit window reaches this many pilot half-widths beyond the band: a
/// Lorentzian line holds all but about (1/x)³·(2/3π) ≈ 0.2 % of its
/// frequency information within x = 5 half-widths of its centre.
pub const FIT_WINDOW_HALF_WIDTHS: f64 = 5.0;
/// The band-signal taper's edge is at least this many times the pilot
/// decay rate wide (Hz per 1/s), so that its time response (and the delay
/// below) is short against the decay time 1/α.
pub const TAPER_EDGE_PER_DECAY: f64 = 5.0;
/// The band signal starts this many taper edge-response lengths (1/edge
/// width) after the onset: the taper smears the onset over about that
/// time, with a residue falling as 1/t³ (raised-cosine edge), under 1 %
/// here.
pub const DELAY_EDGE_LENGTHS: f64 = 2.5;
/// Singular values of the pencil's data matrix above this multiple of the
/// white-noise edge σ_y·(√rows + √cols) count as signal. Random Hankel
/// matrices have somewhat larger norms than matrices of independent
/// entries; 1.5 keeps noise-only pencils at order 0 in 99 % of the trials
/// of `pencil_of_pure_noise_has_order_zero`.
pub const NOISE_EDGE_FACTOR: f64 = 1.5;
/// Peaks of the spectrum are sought within this many pencil windows
/// (±flat half-width) of the centre, and at least [`NEIGHBOUR_REACH_HZ`].
pub const NEIGHBOUR_REACH_WINDOWS: f64 = 4.0;
/// Least reach of the neighbour search, Hz.
pub const NEIGHBOUR_REACH_HZ: f64 = 400.0;
/// A neighbour peak enters the fit when the part of its skirt a straight
/// baseline cannot follow would exceed this fraction of the noise
/// amplitude √(N·σ²) of a bin. A Lorentzian of peak amplitude a and
/// half-width h bins, Δ bins away, has a skirt a·h/Δ whose departure from
/// a straight line across ±W bins is about a·h·W²/Δ³ (the quadratic term
/// of its Taylor series).
pub const NEIGHBOUR_CURVATURE_NOISE: f64 = 0.3;
/// A neighbour peak tops the bins this far either side.
pub const NEIGHBOUR_PEAK_GUARD_BINS: i64 = 3;
/// A neighbour peak stands this far above the mean noise power of a bin
/// (10 dB; pure noise reaches it in e^(−10) ≈ 5e−5 of the bins).
pub const NEIGHBOUR_MIN_SNR: f64 = 10.0;
/// A neighbour peak's power is at least this multiple (6 dB) of the
/// lowest bin within four half-widths on either side.
pub const NEIGHBOUR_PROMINENCE: f64 = 4.0;
/// A pencil pole is kept when its energy over the pencil samples exceeds
/// the noise variance of one band sample by this factor (10 dB).
pub const MIN_PENCIL_ENERGY: f64 = 10.0;
/// A fitted component is kept when its amplitude is this many standard
/// errors from zero (a two-sided 0.3 % false-alarm test per component).
pub const MIN_AMPLITUDE_Z: f64 = 3.0;
/// Degree of the baseline polynomial in frequency across the fit window.
pub const BASELINE_DEGREE: usize = 1;
/// The baseline is kept when its Wald statistic eᵀ·C_e⁻¹·e (A. Wald,
/// "Tests of statistical hypotheses concerning several parameters when
/// the number of observations is large", Trans. AMS 54(3), 1943;
/// asymptotically the likelihood-ratio statistic of dropping it) exceeds
/// this: the 99th percentile of χ² with 2·(degree + 1) = 4 degrees of
/// freedom. A baseline confounds with a line's amplitude and,
/// through its phase, its frequency: over a window of W half-widths it
/// raises the frequency bound by roughly 2/W, so it is used only where
/// leakage from outside the window calls for it.
pub const BASELINE_CHI2: f64 = 13.277;
/// Most Levenberg–Marquardt iterations per fit.
pub const MAX_ITERATIONS: usize = 30;
/// The fit has converged when every nonlinear parameter's last step is
/// below this fraction of its standard error.
pub const STEP_TOLERANCE_SE: f64 = 0.05;

/// One damped partial found in a band.
#[derive(Debug, Clone, Serialize)]
pub struct DampedComponent {
    /// Frequency, Hz.
    pub frequency_hz: f64,
    /// Standard uncertainty of the frequency, Hz: the Cramér–Rao bound of
    /// the band model at the estimates (module notes).
    pub frequency_u_hz: f64,
    /// Single-component Cramér–Rao bound at the estimated amplitude,
    /// decay and the caller's noise, Hz ([`crate::signal::crlb::crlb_frequency_hz`]).
    pub crlb_hz: f64,
    /// Amplitude decay rate α, 1/s (negative for a growing component).
    pub decay_rate_per_s: f64,
    /// Standard uncertainty of α, 1/s (same origin as `frequency_u_hz`).
    pub decay_rate_u_per_s: f64,
    /// Time to decay by 60 dB, 3·ln 10/α, s (infinite when α ≤ 0).
    pub t60_s: f64,
    /// Quality factor π·f/α (infinite when α ≤ 0).
    pub q: f64,
    /// Initial amplitude A at the span's first sample, sample units.
    pub amplitude: f64,
    /// Phase φ of A·cos(2πft + φ) at t = 0, rad.
    pub phase_rad: f64,
    /// Initial SNR A²/(2σ²), dB.
    pub snr_db: f64,
}

/// Where to look and how many partials to expect.
#[derive(Debug, Clone, Copy)]
pub struct BandConfig {
    /// Band centre (an FFT candidate), Hz.
    pub centre_hz: f64,
    /// Components are reported within ± this of the centre, Hz.
    pub half_width_hz: f64,
    /// Most components reported in the band.
    pub max_order: usize,
}

/// Why the fit stopped.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum StopReason {
    /// The last step fell below [`STEP_TOLERANCE_SE`] standard errors.
    Converged,
    /// No step lowered the residual any more (at a minimum to rounding).
    NoProgress,
    /// [`MAX_ITERATIONS`] reached.
    MaxIterations,
    /// Nothing to fit: span too short, band outside the spectrum or no
    /// component above the noise.
    NothingToFit,
}

/// A band estimate with the diagnostics of how it was obtained.
#[derive(Debug, Clone, Serialize)]
pub struct BandFit {
    /// Components within the band, sorted by frequency.
    pub components: Vec<DampedComponent>,
    /// Order chosen by MDL on the pencil.
    pub mdl_order: usize,
    /// Singular values above the noise edge.
    pub noise_edge_order: usize,
    /// Band samples in the pencil.
    pub pencil_samples: usize,
    /// Rate of the band signal, Hz.
    pub pencil_rate_hz: f64,
    /// Half-width of the fitted stretch of spectrum around the centre, Hz.
    pub fit_half_width_hz: f64,
    /// Bins fitted.
    pub fit_bins: usize,
    /// Components in the final fit, in and out of the band.
    pub fitted_components: usize,
    /// Components removed as insignificant or growing.
    pub rejected_components: usize,
    /// Baseline coefficients in the final fit (0: none was significant).
    pub baseline_terms: usize,
    /// Levenberg–Marquardt iterations, summed over refits.
    pub iterations: usize,
    /// Why the last fit stopped.
    pub stop: StopReason,
    /// Residual power over its expectation under the noise model,
    /// Σ|r_k|²/(N·σ²·(bins − parameters/2)): near 1 when the model and
    /// the noise variance are right.
    pub reduced_chi2: f64,
    /// Samples of the span used (N).
    pub samples_used: usize,
}

impl BandFit {
    pub(super) fn empty(n: usize) -> Self {
        BandFit {
            components: Vec::new(),
            mdl_order: 0,
            noise_edge_order: 0,
            pencil_samples: 0,
            pencil_rate_hz: 0.0,
            fit_half_width_hz: 0.0,
            fit_bins: 0,
            fitted_components: 0,
            rejected_components: 0,
            baseline_terms: 0,
            iterations: 0,
            stop: StopReason::NothingToFit,
            reduced_chi2: f64::NAN,
            samples_used: n,
        }
    }
}
