//! High-resolution estimates of the damped partials in one frequency band:
//! matrix pencil for the model order and starting values, then a
//! maximum-likelihood fit of the exact spectrum of a sum of damped
//! sinusoids.
//!
//! Conventions:
//! - Model: x\[n\] = Σ_i A_i·e^(−α_i·t)·cos(2π f_i t + φ_i) + w\[n\], t = n/fs,
//!   with t = 0 at the first sample of the span (the tap onset), A_i the
//!   initial amplitude in the unit of the samples, α_i the amplitude decay
//!   rate in 1/s, φ_i in rad, w white Gaussian noise of variance σ² per
//!   sample (`noise_variance`). T60 = 3·ln 10/α, Q = π·f/α.
//! - SNR: A²/(2σ²), the power of the sinusoid at t = 0 over the noise
//!   variance per sample, in dB (the η of S. M. Kay, "Fundamentals of
//!   Statistical Signal Processing: Estimation Theory", 1993, §3.7).
//! - Spectrum: the DFT of the first N samples of the span, N the largest
//!   2^a·3^b·5^c not above the span length (no window, no zero padding, so
//!   the bins of white noise are independent, each with E|W_k|² = N·σ²).
//!   Bin k lies at k·fs/N Hz.
//! - Poles are counted per sample: s = −α/fs + i·2πf/fs, z = e^s.
//!
//! Method, per band:
//! 1. Pilot: the peak bin in the band and its half-power half-width, an
//!    upper estimate of the line width α/(2π) Hz that sets the windows.
//! 2. Band signal: the bins around the band, tapered in frequency (flat,
//!    raised-cosine edges), delayed by a few taper-response lengths so the
//!    taper's smearing of the onset stays outside the kept samples, and
//!    inverse-transformed with a short FFT: a complex baseband signal
//!    decimated to a rate just above the window width (mixing, low-pass
//!    filtering and decimation in one step).
//! 3. Matrix pencil (Y. Hua and T. K. Sarkar, "Matrix pencil method for
//!    estimating parameters of exponentially damped/undamped sinusoids in
//!    noise", IEEE Trans. ASSP 38(5), 1990, the SVD-filtered form of their
//!    §III) on at most [`MAX_PENCIL_SAMPLES`] band samples, pencil
//!    parameter L = M/3. Model order by the minimum description length
//!    criterion of M. Wax and T. Kailath, "Detection of signals by
//!    information theoretic criteria", IEEE Trans. ASSP 33(2), 1985, eq.
//!    (16), on the squared singular values, capped by the number of singular
//!    values above the noise edge [`NOISE_EDGE_FACTOR`]·σ_y·(√rows + √cols)
//!    (the largest singular value of a matrix of white noise, S. Geman,
//!    "A limit theorem for the norm of random matrices", Ann. Probab. 8(2),
//!    1980, widened for the Hankel structure). Amplitudes by linear least
//!    squares on the Vandermonde matrix; poles too weak to stand out of the
//!    noise over the pencil are dropped.
//! 4. Maximum-likelihood refinement: the DFT of a damped exponential
//!    b·z^n over n = 0..N−1 at bin k is b·(1 − z^N)/(1 − z·e^(−2πik/N))
//!    (a geometric series; exact, with no leakage approximation). The bins
//!    within the fit window are fitted by Levenberg–Marquardt (D. W.
//!    Marquardt, "An algorithm for least-squares estimation of nonlinear
//!    parameters", J. SIAM 11(2), 1963) with analytic derivatives, each
//!    real partial as the pair b·z^n + b̄·z̄^n (its negative-frequency image
//!    included exactly) and, for everything farther away, a straight-line
//!    baseline in frequency (the polynomial nuisance term of the
//!    frequency-selective methods, e.g. P. Stoica et al., "Frequency-domain
//!    method based on the singular value decomposition for
//!    frequency-selective NMR spectroscopy", J. Magn. Reson. 165, 2003).
//!    With independent Gaussian bins this least-squares fit is the maximum-
//!    likelihood estimate of the band's parameters. Poles of the pencil
//!    just outside the fit window keep their frequency and decay and only
//!    their amplitude is fitted.
//! 5. Components whose amplitude is below [`MIN_AMPLITUDE_Z`] standard
//!    errors, or which grow significantly, are removed and the fit is
//!    repeated; those outside the band are reported in [`BandFit`] only as
//!    counts.
//!
//! Uncertainties: the covariance of the fit is (N·σ²/2)·(JᵀJ)⁻¹ with J the
//! Jacobian of the real and imaginary parts of the bins at the solution,
//! i.e. the inverse Fisher information of the band model evaluated at the
//! estimates with the caller's noise variance: the multi-component
//! Cramér–Rao bound (CRLB) used as the standard uncertainty. For an
//! isolated partial it equals the single-component bound of
//! [`crate::signal::crlb::crlb_frequency_hz`] (also reported, as `crlb_hz`); near
//! another partial it is larger. It is attained when the estimator is
//! efficient, which `examples/accuracy.rs` checks by Monte Carlo.

use crate::signal::crlb;
use nalgebra::{Complex, DMatrix, DVector};
use realfft::RealFftPlanner;
use rustfft::FftPlanner;
use serde::Serialize;
use std::f64::consts::{LN_10, PI};

type C64 = Complex<f64>;

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

/// Fits the band from the given free poles, removing the least
/// significant component (amplitude below [`MIN_AMPLITUDE_Z`] standard
/// errors, or growing by more than that) and refitting until all pass.
/// Returns the last fit, the number removed and the iterations spent.
fn fit_with_rejection(
    problem: &mut FitProblem,
    mut free: Vec<C64>,
    fixed: &[C64],
) -> (FitResult, usize, usize) {
    let mut rejected = 0usize;
    let mut iterations = 0usize;
    loop {
        let result = problem.solve(&free, fixed);
        iterations += result.iterations;
        // A component broader than the window is background (which the
        // baseline models), not a partial: the broadest goes first.
        let broadest = result
            .free
            .iter()
            .enumerate()
            .filter(|(_, c)| -c.s.re > problem.broad_limit)
            .min_by(|a, b| a.1.s.re.total_cmp(&b.1.s.re))
            .map(|(i, _)| i);
        let worst = broadest.or_else(|| {
            result
                .free
                .iter()
                .enumerate()
                .filter(|(_, c)| c.amplitude_z < MIN_AMPLITUDE_Z || c.growth_z > MIN_AMPLITUDE_Z)
                .min_by(|a, b| a.1.amplitude_z.total_cmp(&b.1.amplitude_z))
                .map(|(i, _)| i)
        });
        let Some(i) = worst else {
            return (result, rejected, iterations);
        };
        // Restart from the fitted poles of the others.
        free = result
            .free
            .iter()
            .enumerate()
            .filter(|&(j, _)| j != i)
            .map(|(_, c)| c.s)
            .collect();
        rejected += 1;
    }
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
    fn empty(n: usize) -> Self {
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

/// Estimates the damped partials in one band of `span` (t = 0 at
/// `span[0]`). `noise_variance` is σ², the per-sample variance of white
/// noise at the band's level (for coloured noise, the background's
/// variance density at the band centre). For many bands of the same span
/// use [`SpanAnalyser`], which transforms the span once. Only tests call
/// it (here and in `physics::evenness`); the pipeline uses [`SpanAnalyser`].
#[cfg(test)]
pub fn estimate_band(
    span: &[f64],
    sample_rate_hz: f64,
    band: &BandConfig,
    noise_variance: f64,
) -> Vec<DampedComponent> {
    SpanAnalyser::new(span, sample_rate_hz, noise_variance)
        .estimate(band)
        .components
}

/// The spectrum of one span, ready for band estimates.
pub struct SpanAnalyser {
    sample_rate_hz: f64,
    n: usize,
    noise_variance: f64,
    spectrum: Vec<C64>,
    planner: FftPlanner<f64>,
    pencil_samples: usize,
}

impl std::fmt::Debug for SpanAnalyser {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("SpanAnalyser")
            .field("sample_rate_hz", &self.sample_rate_hz)
            .field("n", &self.n)
            .field("noise_variance", &self.noise_variance)
            .finish()
    }
}

/// Largest 2^a·3^b·5^c not above `n` (0 for n = 0).
pub fn smooth_size_at_most(n: usize) -> usize {
    let mut best = 0usize;
    let mut p2 = 1usize;
    while p2 <= n {
        let mut p3 = p2;
        while p3 <= n {
            let mut p5 = p3;
            while p5 <= n {
                best = best.max(p5);
                p5 *= 5;
            }
            p3 *= 3;
        }
        p2 *= 2;
    }
    best
}

impl SpanAnalyser {
    /// Transforms the span (module notes for N).
    pub fn new(span: &[f64], sample_rate_hz: f64, noise_variance: f64) -> Self {
        let mut planner = RealFftPlanner::new();
        Self::new_with(span, sample_rate_hz, noise_variance, &mut planner)
    }

    /// As [`SpanAnalyser::new`], reusing an FFT planner.
    pub fn new_with(
        span: &[f64],
        sample_rate_hz: f64,
        noise_variance: f64,
        planner: &mut RealFftPlanner<f64>,
    ) -> Self {
        let n = smooth_size_at_most(span.len().min(MAX_SPAN_SAMPLES));
        let spectrum = if n >= MIN_SPAN_SAMPLES && sample_rate_hz > 0.0 {
            let fft = planner.plan_fft_forward(n);
            let mut input = fft.make_input_vec();
            input.copy_from_slice(&span[..n]);
            let mut output = fft.make_output_vec();
            // Buffers come from the planner, so processing cannot fail.
            fft.process(&mut input, &mut output)
                .expect("buffers sized by the planner");
            output
        } else {
            Vec::new()
        };
        SpanAnalyser {
            sample_rate_hz,
            n,
            noise_variance,
            spectrum,
            planner: FftPlanner::new(),
            pencil_samples: MAX_PENCIL_SAMPLES,
        }
    }

    /// Sets the noise variance per sample for the following bands (0:
    /// estimate it from each band's own bins).
    pub fn set_noise_variance(&mut self, noise_variance: f64) {
        self.noise_variance = noise_variance;
    }

    /// Caps the band samples in the pencil (default
    /// [`MAX_PENCIL_SAMPLES`]; at least [`MIN_PENCIL_SAMPLES`]). Fewer
    /// cost less (the pencil's SVD grows with the cube) and resolve close
    /// pairs less often: at 40 dB SNR a pair 0.25/τ apart is resolved in
    /// about 94 % of trials with 96 samples (`examples/accuracy.rs`, variable-projection fit; 80 % and 56 % with 96 and 48 before it)
    pub fn set_pencil_samples(&mut self, samples: usize) {
        self.pencil_samples = samples.max(MIN_PENCIL_SAMPLES);
    }

    /// Samples of the span analysed (N).
    pub fn samples_used(&self) -> usize {
        self.n
    }

    /// DFT bin k for any integer k (negative and above N/2 by Hermitian
    /// symmetry of a real signal's transform).
    fn bin(&self, k: i64) -> C64 {
        let n = self.n as i64;
        let k = k.rem_euclid(n);
        if k <= n / 2 {
            self.spectrum[k as usize]
        } else {
            self.spectrum[(n - k) as usize].conj()
        }
    }

    /// Estimates the damped partials of one band (module notes).
    pub fn estimate(&mut self, band: &BandConfig) -> BandFit {
        let n = self.n;
        let mut out = BandFit::empty(n);
        let fs = self.sample_rate_hz;
        if self.spectrum.is_empty()
            || !(band.centre_hz > 0.0 && band.centre_hz < fs / 2.0)
            || band.half_width_hz.is_nan()
            || band.half_width_hz <= 0.0
            || band.max_order == 0
        {
            return out;
        }
        let nf = n as f64;
        let bin_hz = fs / nf;
        let top = (n / 2) as i64 - 1;
        let kc = ((band.centre_hz / bin_hz).round() as i64).clamp(1, top.max(1));
        let hw_bins = (band.half_width_hz / bin_hz).ceil().max(1.0) as i64;

        // 1. Pilot peak and half-width.
        let lo = (kc - hw_bins).max(1);
        let hi = (kc + hw_bins).min(top);
        if hi < lo {
            return out;
        }
        let (kp, pmax) = (lo..=hi)
            .map(|k| (k, self.bin(k).norm_sqr()))
            .fold((lo, -1.0), |best, c| if c.1 > best.1 { c } else { best });
        let hwhm_bins = self.half_power_half_width(kp, pmax, 4 * hw_bins + 64);
        let hwhm_hz = hwhm_bins.max(0.443) * bin_hz;
        let alpha_pilot = 2.0 * PI * hwhm_hz;

        // Noise: the caller's, else the lower quartile of the band's bins
        // over its mean for exponentially distributed bin powers.
        let sigma2 = if self.noise_variance > 0.0 && self.noise_variance.is_finite() {
            self.noise_variance
        } else {
            self.quartile_noise(kc, 4 * hw_bins + 32)
        };
        if sigma2.is_nan() || sigma2 <= 0.0 {
            return out;
        }

        // 2. Windows.
        let fit_hw = band.half_width_hz + FIT_WINDOW_HALF_WIDTHS * hwhm_hz + 2.0 * bin_hz;
        let flat_hw = fit_hw + 3.0 * hwhm_hz + 2.0 * bin_hz;
        let edge = (TAPER_EDGE_PER_DECAY * alpha_pilot)
            .max(0.5 * flat_hw)
            .max(4.0 * bin_hz);
        let needed_bins = (2.0 * (flat_hw + edge) / bin_hz).ceil() as usize;
        let q = needed_bins.next_power_of_two().clamp(16, 8192);
        out.fit_half_width_hz = fit_hw;

        let poles = if q <= n / 2 {
            let pencil = self.pencil(kc, q, flat_hw, edge, sigma2, band.max_order);
            out.mdl_order = pencil.mdl_order;
            out.noise_edge_order = pencil.edge_order;
            out.pencil_samples = pencil.samples;
            out.pencil_rate_hz = q as f64 * bin_hz;
            pencil.poles
        } else {
            Vec::new()
        };

        // 3. Fit window and starting poles.
        let fit_bins = (fit_hw / bin_hz).ceil() as i64;
        let klo = (kc - fit_bins).max(1);
        let khi = (kc + fit_bins).min(top);
        let fc_hz = kc as f64 * bin_hz;
        let freq = |s: C64| s.im * fs / (2.0 * PI);
        let mut free: Vec<C64> = Vec::new();
        let mut fixed: Vec<C64> = Vec::new();
        for &s in &poles {
            let d = (freq(s) - fc_hz).abs();
            if d <= fit_hw {
                free.push(s);
            } else if d <= flat_hw {
                fixed.push(s);
            }
        }
        // Strong peaks beyond the pencil's window leak into the fit window
        // with a curvature a straight baseline cannot follow: they enter
        // with their frequency and decay from the spectrum.
        let reach = (NEIGHBOUR_REACH_WINDOWS * flat_hw).max(NEIGHBOUR_REACH_HZ);
        let used: Vec<C64> = free.iter().chain(&fixed).copied().collect();
        let extra = self.neighbour_poles(kc, fit_hw, reach, sigma2, &used);
        fixed.extend(extra);
        // The spectral peak starts the fit when the pencil found nothing
        // in the band.
        let in_band = |s: &C64| (freq(*s) - band.centre_hz).abs() <= band.half_width_hz;
        if !free.iter().any(in_band) {
            let frac = self.parabolic_offset(kp);
            free.push(C64::new(
                -alpha_pilot / fs,
                2.0 * PI * (kp as f64 + frac) / nf,
            ));
        }
        let mut problem = FitProblem::new(self, klo, khi, kc, fit_bins as f64, sigma2);
        out.fit_bins = problem.data.len();

        // 4–5. Fit, drop insignificant components, refit; then drop the
        // baseline unless it is significant.
        let (mut result, mut rejected, iters) = fit_with_rejection(&mut problem, free, &fixed);
        out.iterations += iters;
        if !result.free.is_empty() && result.baseline_wald < BASELINE_CHI2 {
            let start: Vec<C64> = result.free.iter().map(|c| c.s).collect();
            problem.baseline_terms = 0;
            let (plain, plain_rejected, iters) = fit_with_rejection(&mut problem, start, &fixed);
            out.iterations += iters;
            result = plain;
            rejected += plain_rejected;
        }
        out.baseline_terms = problem.baseline_terms;
        out.rejected_components = rejected;
        out.fitted_components = result.free.len() + fixed.len();
        out.stop = if result.free.is_empty() {
            StopReason::NothingToFit
        } else {
            result.stop
        };
        out.reduced_chi2 = result.reduced_chi2;

        let mut comps: Vec<DampedComponent> = result
            .free
            .iter()
            .filter(|c| in_band(&c.s))
            .map(|c| {
                let f = freq(c.s);
                let alpha = -c.s.re * fs;
                let amp = 2.0 * c.b.norm();
                let (t60, qf) = if alpha > 0.0 {
                    (3.0 * LN_10 / alpha, PI * f / alpha)
                } else {
                    (f64::INFINITY, f64::INFINITY)
                };
                DampedComponent {
                    frequency_hz: f,
                    frequency_u_hz: c.var_omega.sqrt() * fs / (2.0 * PI),
                    crlb_hz: crlb::crlb_frequency_hz(amp, alpha.max(0.0), fs, n, sigma2),
                    decay_rate_per_s: alpha,
                    decay_rate_u_per_s: c.var_sigma.sqrt() * fs,
                    t60_s: t60,
                    q: qf,
                    amplitude: amp,
                    phase_rad: c.b.arg(),
                    snr_db: 10.0 * (amp * amp / (2.0 * sigma2)).log10(),
                }
            })
            .collect();
        comps.sort_by(|a, b| b.amplitude.total_cmp(&a.amplitude));
        comps.truncate(band.max_order);
        comps.sort_by(|a, b| a.frequency_hz.total_cmp(&b.frequency_hz));
        out.components = comps;
        out
    }

    /// Half-width (bins) at half power of the peak at `kp`, each side
    /// interpolated linearly in power and the two sides averaged; a side
    /// that stays above half power for `limit` bins counts as `limit`. A
    /// side that climbs again to [`VALLEY_RISE`] times its lowest power
    /// before reaching half power has run into a neighbour's peak: it
    /// ends at the valley (there the line is at least that narrow, and
    /// walking on would measure the neighbours, not the line).
    fn half_power_half_width(&self, kp: i64, pmax: f64, limit: i64) -> f64 {
        let half = 0.5 * pmax;
        let side = |dir: i64| -> f64 {
            let mut prev = pmax;
            let mut low = (0i64, pmax);
            for step in 1..=limit {
                let k = kp + dir * step;
                if k < 1 || k > (self.n / 2) as i64 - 1 {
                    return step as f64;
                }
                let p = self.bin(k).norm_sqr();
                if p < half {
                    return (step - 1) as f64 + (prev - half) / (prev - p);
                }
                if p < low.1 {
                    low = (step, p);
                } else if p > VALLEY_RISE * low.1 {
                    return low.0.max(1) as f64;
                }
                prev = p;
            }
            limit as f64
        };
        0.5 * (side(-1) + side(1))
    }

    /// Poles for the spectral peaks within `reach` Hz of bin `kc` but
    /// outside the fit window (±`fit_hw`), that the pencil did not
    /// already give: local maxima over ±[`NEIGHBOUR_PEAK_GUARD_BINS`]
    /// bins standing [`NEIGHBOUR_MIN_SNR`] above the noise power N·σ² of
    /// a bin, placed by the log-parabola and given the decay of their
    /// half-power width.
    fn neighbour_poles(
        &self,
        kc: i64,
        fit_hw: f64,
        reach: f64,
        sigma2: f64,
        known: &[C64],
    ) -> Vec<C64> {
        let nf = self.n as f64;
        let fs = self.sample_rate_hz;
        let bin_hz = fs / nf;
        let g = NEIGHBOUR_PEAK_GUARD_BINS;
        let top = (self.n / 2) as i64 - 1;
        let reach_bins = (reach / bin_hz).ceil() as i64;
        let fit_bins = (fit_hw / bin_hz).floor() as i64;
        let floor = NEIGHBOUR_MIN_SNR * nf * sigma2;
        let mut out = Vec::new();
        for k in (kc - reach_bins).max(g + 1)..=(kc + reach_bins).min(top - g) {
            if (k - kc).abs() <= fit_bins {
                continue;
            }
            let p = self.bin(k).norm_sqr();
            if p < floor
                || (1..=g)
                    .any(|d| self.bin(k - d).norm_sqr() > p || self.bin(k + d).norm_sqr() >= p)
            {
                continue;
            }
            let hwhm = self.half_power_half_width(k, p, 64).max(0.443);
            // Prominence: the peak tops the lowest bin on each side within
            // four half-widths (a Lorentzian falls 12 dB there) by
            // [`NEIGHBOUR_PROMINENCE`]. Noise ripple on the skirt of a
            // strong line makes local maxima too, but not prominent ones.
            let reach_p = ((4.0 * hwhm).ceil() as i64).max(2 * g);
            let low = |dir: i64| {
                (1..=reach_p)
                    .map(|d| self.bin(k + dir * d).norm_sqr())
                    .fold(f64::INFINITY, f64::min)
            };
            if p < NEIGHBOUR_PROMINENCE * low(-1).max(low(1)) {
                continue;
            }
            let dist = (k - kc).abs() as f64;
            let curvature = p.sqrt() * hwhm * (fit_bins as f64).powi(2) / dist.powi(3);
            if curvature < NEIGHBOUR_CURVATURE_NOISE * (nf * sigma2).sqrt() {
                continue;
            }
            let omega = 2.0 * PI * (k as f64 + self.parabolic_offset(k)) / nf;
            let near = known
                .iter()
                .chain(out.iter())
                .any(|s| ((s.im - omega) * nf / (2.0 * PI)).abs() < (2.0 * hwhm).max(g as f64));
            if !near {
                out.push(C64::new(-2.0 * PI * hwhm / nf, omega));
            }
        }
        out
    }

    /// Peak offset (bins) from a parabola through the log power of the
    /// peak bin and its neighbours (as in [`crate::signal::partials::pick_peaks`]).
    fn parabolic_offset(&self, kp: i64) -> f64 {
        let p = |k: i64| (self.bin(k).norm_sqr() + 1e-300).ln();
        let (a, b, c) = (p(kp - 1), p(kp), p(kp + 1));
        let den = a - 2.0 * b + c;
        if den.abs() > 1e-12 {
            (0.5 * (a - c) / den).clamp(-0.5, 0.5)
        } else {
            0.0
        }
    }

    /// Noise variance per sample from the lower quartile of |X_k|² within
    /// ±`half` bins of `kc`: for Gaussian noise |X_k|²/(N·σ²) is
    /// exponential, whose lower quartile is ln(4/3) of its mean.
    fn quartile_noise(&self, kc: i64, half: i64) -> f64 {
        let mut p: Vec<f64> = ((kc - half).max(1)..=(kc + half).min((self.n / 2) as i64 - 1))
            .map(|k| self.bin(k).norm_sqr())
            .collect();
        if p.is_empty() {
            return 0.0;
        }
        p.sort_by(f64::total_cmp);
        p[p.len() / 4] / (4.0f64 / 3.0).ln() / self.n as f64
    }

    /// The band signal and its matrix pencil (module notes, steps 2–3).
    fn pencil(
        &mut self,
        kc: i64,
        q: usize,
        flat_hw: f64,
        edge: f64,
        sigma2: f64,
        max_order: usize,
    ) -> PencilPoles {
        let n = self.n;
        let nf = n as f64;
        let fs = self.sample_rate_hz;
        let bin_hz = fs / nf;
        let delay = DELAY_EDGE_LENGTHS / edge * fs; // samples
        let decim = nf / q as f64; // full-rate samples per band sample
        let mut buf = vec![C64::new(0.0, 0.0); q];
        let mut gain_sq = 0.0;
        let half = (q / 2) as i64;
        // The delay ramp e^(2πi·j·delay/N) by rotation (renormalised, so
        // rounding cannot build up), not by a cosine and sine per bin.
        let turn = 2.0 * PI * delay / nf;
        let step = C64::from_polar(1.0, turn);
        let mut ramp = C64::from_polar(1.0, turn * (-half) as f64);
        for j in -half..half {
            let this_ramp = ramp;
            ramp *= step;
            if j % 64 == 0 {
                ramp /= ramp.norm();
            }
            let f = (j as f64 * bin_hz).abs();
            let w = if f <= flat_hw {
                1.0
            } else if f < flat_hw + edge {
                let c = (0.5 * PI * (f - flat_hw) / edge).cos();
                c * c
            } else {
                0.0
            };
            if w == 0.0 {
                continue;
            }
            gain_sq += w * w;
            buf[j.rem_euclid(q as i64) as usize] = self.bin(kc + j) * this_ramp * (w / nf);
        }
        let ifft = self.planner.plan_fft_inverse(q);
        ifft.process(&mut buf);
        // Noise variance of a band sample: E|y|² = σ²·Σw²/N.
        let sigma_y2 = sigma2 * gain_sq / nf;
        // Keep away from the span's end, which the taper smears too.
        let usable = (nf - delay - DELAY_EDGE_LENGTHS / edge * fs) / decim;
        let avail = if usable > 0.0 { usable as usize } else { 0 };
        let avail = avail.min(q);
        // Stop where the band's envelope has sunk into the noise (3 dB
        // above it, smoothed over three samples), with half as much again.
        let env = |m: usize| -> f64 {
            let a = m.saturating_sub(1);
            let b = (m + 1).min(avail.saturating_sub(1));
            (a..=b).map(|i| buf[i].norm_sqr()).sum::<f64>() / (b + 1 - a) as f64
        };
        let mut cut = avail;
        for m in 0..avail {
            if env(m) < 2.0 * sigma_y2 {
                cut = m;
                break;
            }
        }
        let m_len = ((1.5 * cut as f64).ceil() as usize)
            .max(MIN_PENCIL_SAMPLES)
            .min(avail)
            .min(self.pencil_samples);
        let mut result = PencilPoles {
            poles: Vec::new(),
            mdl_order: 0,
            edge_order: 0,
            samples: m_len,
        };
        if m_len < MIN_PENCIL_SAMPLES {
            return result;
        }
        let y = &buf[..m_len];
        let pencil_cap = (max_order + EXTRA_PENCIL_ORDER).min(m_len / 3 - 1);
        let Some(mp) = matrix_pencil(y, pencil_cap, sigma_y2.sqrt()) else {
            return result;
        };
        result.mdl_order = mp.mdl_order;
        result.edge_order = mp.edge_order;
        let omega_c = 2.0 * PI * kc as f64 / nf;
        for (z, h) in mp.poles.iter().zip(&mp.amplitudes) {
            if z.norm().is_nan() || z.norm() <= 0.0 || !z.re.is_finite() || !z.im.is_finite() {
                continue;
            }
            // Energy over the pencil samples against one sample's noise.
            let r2 = z.norm_sqr();
            let energy = if (r2 - 1.0).abs() < 1e-12 {
                h.norm_sqr() * m_len as f64
            } else {
                h.norm_sqr() * (1.0 - r2.powi(m_len as i32)) / (1.0 - r2)
            };
            if energy < MIN_PENCIL_ENERGY * sigma_y2 {
                continue;
            }
            let s_bb = z.ln() / decim;
            // Growing poles start as barely decaying ones.
            let re = s_bb.re.min(-0.1 / nf);
            result.poles.push(C64::new(re, s_bb.im + omega_c));
        }
        result
    }
}

/// Poles of a band's pencil in full-rate units.
struct PencilPoles {
    poles: Vec<C64>,
    mdl_order: usize,
    edge_order: usize,
    samples: usize,
}

/// Result of [`matrix_pencil`].
#[derive(Debug, Clone)]
pub struct PencilResult {
    /// Poles z_i (per sample of the input).
    pub poles: Vec<C64>,
    /// Complex amplitudes h_i of y\[m\] ≈ Σ h_i·z_i^m.
    pub amplitudes: Vec<C64>,
    /// Singular values of the data matrix, descending.
    pub singular_values: Vec<f64>,
    /// MDL order.
    pub mdl_order: usize,
    /// Singular values above the noise edge (all, when `noise_sd` = 0).
    pub edge_order: usize,
}

/// The matrix pencil method (Hua and Sarkar 1990, SVD form): the Hankel
/// matrix Y (M−L)×(L+1) of y, Y = UΣVᴴ; with the K principal right
/// singular vectors, A₁ = Vᴴ_K without its last column and A₂ without its
/// first, the poles are the eigenvalues of A₂·A₁ᴴ·(A₁A₁ᴴ)⁻¹ (K×K), since
/// A₂ = TΛT⁻¹A₁ for the pole matrix Λ. K is the MDL order capped by
/// `max_order` and, when `noise_sd` (the standard deviation of a sample of
/// the complex noise) is positive, by the count of singular values above
/// [`NOISE_EDGE_FACTOR`]·noise_sd·(√(M−L) + √(L+1)). Amplitudes by least
/// squares on the Vandermonde matrix. Returns None when y is too short
/// (M < 6) or a decomposition fails.
pub fn matrix_pencil(y: &[C64], max_order: usize, noise_sd: f64) -> Option<PencilResult> {
    let m = y.len();
    if m < 6 {
        return None;
    }
    let l = (m / 3).max(2);
    let rows = m - l;
    let cols = l + 1;
    let hankel = DMatrix::from_fn(rows, cols, |i, j| y[i + j]);
    let svd = hankel.svd(false, true);
    let sv: Vec<f64> = svd.singular_values.iter().copied().collect();
    let v_t = svd.v_t?;
    let mdl = mdl_order(&sv, rows, max_order.min(l - 1));
    let edge_order = if noise_sd > 0.0 {
        let edge = NOISE_EDGE_FACTOR * noise_sd * ((rows as f64).sqrt() + (cols as f64).sqrt());
        sv.iter().filter(|&&s| s > edge).count()
    } else {
        sv.len()
    };
    let k = mdl.min(edge_order).min(max_order).min(l - 1);
    let mut result = PencilResult {
        poles: Vec::new(),
        amplitudes: Vec::new(),
        singular_values: sv,
        mdl_order: mdl,
        edge_order,
    };
    if k == 0 {
        return Some(result);
    }
    let a1 = v_t.view((0, 0), (k, l)).into_owned();
    let a2 = v_t.view((0, 1), (k, l)).into_owned();
    let a1h = a1.adjoint();
    let gram = &a1 * &a1h;
    let gram_inv = gram.try_inverse()?;
    let f = &a2 * &a1h * gram_inv;
    let poles = eigenvalues_complex(f)?;
    // Amplitudes: least squares on the Vandermonde matrix V_mi = z_i^m.
    let van = DMatrix::from_fn(m, k, |r, c| poles[c].powu(r as u32));
    let rhs = DVector::from_column_slice(y);
    // Normal equations (k×k) where they are well posed; the SVD for
    // nearly coincident poles.
    let h = match van.ad_mul(&van).cholesky() {
        Some(ch) if (0..k).all(|i| ch.l_dirty()[(i, i)].re > 1e-6 * (m as f64).sqrt()) => {
            ch.solve(&van.ad_mul(&rhs))
        }
        _ => van.svd(true, true).solve(&rhs, 1e-12).ok()?,
    };
    result.amplitudes = h.iter().copied().collect();
    result.poles = poles;
    Some(result)
}

/// Eigenvalues of a small complex matrix from its Schur form, reading
/// any 2×2 block left on the diagonal by the quadratic formula.
fn eigenvalues_complex(f: DMatrix<C64>) -> Option<Vec<C64>> {
    let k = f.nrows();
    if k == 1 {
        return Some(vec![f[(0, 0)]]);
    }
    let scale = f.iter().map(|v| v.norm()).fold(0.0, f64::max).max(1e-300);
    let schur = nalgebra::linalg::Schur::try_new(f, 1e-14, 10_000)?;
    let (_, t) = schur.unpack();
    let mut ev = Vec::with_capacity(k);
    let mut i = 0;
    while i < k {
        if i + 1 < k && t[(i + 1, i)].norm() > 1e-12 * scale {
            let (a, b, c, d) = (t[(i, i)], t[(i, i + 1)], t[(i + 1, i)], t[(i + 1, i + 1)]);
            let tr = a + d;
            let det = a * d - b * c;
            let disc = (tr * tr - det * 4.0).sqrt();
            ev.push((tr + disc) * 0.5);
            ev.push((tr - disc) * 0.5);
            i += 2;
        } else {
            ev.push(t[(i, i)]);
            i += 1;
        }
    }
    Some(ev)
}

/// Model order by minimum description length (Wax and Kailath 1985,
/// eq. (16)): with the p eigenvalues λ of the sample covariance (the
/// squared singular values, descending) and `snapshots` rows,
/// MDL(k) = −(p−k)·snapshots·ln(g_k/a_k) + ½·k·(2p−k)·ln(snapshots),
/// g_k and a_k the geometric and arithmetic means of λ_(k+1..p). Returns
/// the k in 0..=`max_order` (and below p) that minimises it.
pub fn mdl_order(singular_values: &[f64], snapshots: usize, max_order: usize) -> usize {
    let p = singular_values.len();
    if p < 2 {
        return 0;
    }
    let lam: Vec<f64> = singular_values
        .iter()
        .map(|s| (s * s).max(1e-300))
        .collect();
    let ns = snapshots.max(1) as f64;
    let mut best = (0usize, f64::INFINITY);
    for k in 0..=max_order.min(p - 1) {
        let tail = &lam[k..];
        let cnt = tail.len() as f64;
        let log_g = tail.iter().map(|v| v.ln()).sum::<f64>() / cnt;
        let a = tail.iter().sum::<f64>() / cnt;
        let mdl = -(cnt * ns) * (log_g - a.ln())
            + 0.5 * (k as f64) * (2.0 * p as f64 - k as f64) * ns.ln();
        if mdl < best.1 {
            best = (k, mdl);
        }
    }
    best.0
}

/// One fitted component with its significance.
#[derive(Debug, Clone, Copy)]
struct FittedComponent {
    /// Pole per sample.
    s: C64,
    /// Complex amplitude of b·z^n (the real partial is b·z^n + b̄·z̄^n).
    b: C64,
    /// Variance of Re s (decay per sample), per sample².
    var_sigma: f64,
    /// Variance of Im s (rad/sample)².
    var_omega: f64,
    /// |b| over its standard error.
    amplitude_z: f64,
    /// −Re s over its standard error when the component grows (else 0).
    growth_z: f64,
}

struct FitResult {
    free: Vec<FittedComponent>,
    iterations: usize,
    stop: StopReason,
    reduced_chi2: f64,
    /// Wald statistic eᵀ·C_e⁻¹·e of the baseline coefficients (0 without).
    baseline_wald: f64,
}

/// G(s) alone, as in [`geometric`].
fn geometric_value(es: C64, zn: C64, w: C64, n: f64) -> C64 {
    let u = es * w;
    let d = u - 1.0;
    if d.norm_sqr() * n * n < 1e-6 {
        return C64::new(n, 0.0)
            + d * (n * (n - 1.0) / 2.0)
            + d * d * (n * (n - 1.0) * (n - 2.0) / 6.0);
    }
    (C64::new(1.0, 0.0) - zn) / (-d)
}

/// The bins of one fit window and the model of their spectrum
/// (module notes, step 4). Parameters, all real: (Re s, Im s) of each
/// free pole, then (Re b, Im b) of every component (free, then fixed),
/// then (Re e, Im e) of each baseline coefficient.
struct FitProblem {
    n: f64,
    /// e^(−2πik/N) per bin.
    w: Vec<C64>,
    /// Baseline abscissa (k − kc)/half-width per bin.
    t: Vec<f64>,
    data: Vec<C64>,
    /// The data stacked (Re of every bin, then Im).
    stacked: DVector<f64>,
    /// Noise variance of each of Re X_k and Im X_k: N·σ²/2.
    bin_var: f64,
    /// Number of baseline coefficients (0: no baseline).
    baseline_terms: usize,
    /// Decay per sample at which a line's half-power half-width α/2π
    /// reaches the fit window's half-width: a component this broad is
    /// background, not a partial ([`fit_with_rejection`]).
    broad_limit: f64,
}

/// G(s) = Σ_{n<N} (e^s·w)^n = (1 − e^(Ns))/(1 − e^s·w) for w^N = 1, and
/// dG/ds = Σ n·(e^s·w)^n; near e^s·w = 1 the three-term series in
/// δ = e^s·w − 1 (error ~ (Nδ)³/24 relative, below 1e−10 where used).
fn geometric(es: C64, zn: C64, w: C64, n: f64) -> (C64, C64) {
    let u = es * w;
    let d = u - 1.0;
    if d.norm_sqr() * n * n < 1e-6 {
        let g = C64::new(n, 0.0)
            + d * (n * (n - 1.0) / 2.0)
            + d * d * (n * (n - 1.0) * (n - 2.0) / 6.0);
        let dg = (C64::new(n * (n - 1.0) / 2.0, 0.0) + d * (n * (n - 1.0) * (n - 2.0) / 3.0)) * u;
        return (g, dg);
    }
    let om = -d; // 1 − u
    let g = (C64::new(1.0, 0.0) - zn) / om;
    let dg = (zn * om * (-n) + (C64::new(1.0, 0.0) - zn) * u) / (om * om);
    (g, dg)
}

impl FitProblem {
    fn new(an: &SpanAnalyser, klo: i64, khi: i64, kc: i64, half: f64, sigma2: f64) -> Self {
        let nf = an.n as f64;
        let mut w = Vec::new();
        let mut t = Vec::new();
        let mut data = Vec::new();
        let step = C64::from_polar(1.0, -2.0 * PI / nf);
        let mut wk = C64::from_polar(1.0, -2.0 * PI * klo as f64 / nf);
        for k in klo..=khi {
            w.push(wk);
            wk *= step;
            t.push((k - kc) as f64 / half.max(1.0));
            data.push(an.bin(k));
        }
        FitProblem {
            n: nf,
            w,
            t,
            stacked: stack(&data),
            data,
            bin_var: nf * sigma2 / 2.0,
            baseline_terms: BASELINE_DEGREE + 1,
            broad_limit: 2.0 * PI * half.max(1.0) / nf,
        }
    }

    /// Residuals d − model and, when asked, the real Jacobian of the
    /// model (rows: Re of every bin, then Im of every bin).
    fn evaluate(
        &self,
        theta: &[f64],
        nfree: usize,
        fixed: &[C64],
        want_jacobian: bool,
    ) -> (Vec<C64>, Option<DMatrix<f64>>) {
        let nb = self.data.len();
        let ncomp = nfree + fixed.len();
        let np = theta.len();
        let mut model = vec![C64::new(0.0, 0.0); nb];
        let mut jac = if want_jacobian {
            Some(DMatrix::<f64>::zeros(2 * nb, np))
        } else {
            None
        };
        let i_unit = C64::new(0.0, 1.0);
        for c in 0..ncomp {
            let s = if c < nfree {
                C64::new(theta[2 * c], theta[2 * c + 1])
            } else {
                fixed[c - nfree]
            };
            let boff = 2 * nfree + 2 * c;
            let b = C64::new(theta[boff], theta[boff + 1]);
            let es = s.exp();
            let zn = (s * self.n).exp();
            let esc = es.conj();
            let znc = zn.conj();
            for k in 0..nb {
                let Some(j) = jac.as_mut() else {
                    let g = geometric_value(es, zn, self.w[k], self.n);
                    let gi = geometric_value(esc, znc, self.w[k], self.n);
                    model[k] += b * g + b.conj() * gi;
                    continue;
                };
                let (g, dg) = geometric(es, zn, self.w[k], self.n);
                let (gi, dgi) = geometric(esc, znc, self.w[k], self.n);
                model[k] += b * g + b.conj() * gi;
                {
                    let mut put = |col: usize, v: C64| {
                        j[(k, col)] = v.re;
                        j[(nb + k, col)] = v.im;
                    };
                    if c < nfree {
                        let d_sigma = b * dg + b.conj() * dgi;
                        let d_omega = i_unit * (b * dg - b.conj() * dgi);
                        put(2 * c, d_sigma);
                        put(2 * c + 1, d_omega);
                    }
                    put(boff, g + gi);
                    put(boff + 1, i_unit * (g - gi));
                }
            }
        }
        let eoff = 2 * nfree + 2 * ncomp;
        for p in 0..self.baseline_terms {
            let e = C64::new(theta[eoff + 2 * p], theta[eoff + 2 * p + 1]);
            for k in 0..nb {
                let tp = self.t[k].powi(p as i32);
                model[k] += e * tp;
                if let Some(j) = jac.as_mut() {
                    j[(k, eoff + 2 * p)] = tp;
                    j[(nb + k, eoff + 2 * p)] = 0.0;
                    j[(k, eoff + 2 * p + 1)] = 0.0;
                    j[(nb + k, eoff + 2 * p + 1)] = tp;
                }
            }
        }
        let r = self.data.iter().zip(&model).map(|(d, m)| d - m).collect();
        (r, jac)
    }

    /// eᵀ·C_e⁻¹·e for the baseline block e of θ, C_e = (N·σ²/2)·(JᵀJ)⁻¹_ee.
    fn baseline_wald(&self, theta: &[f64], inv: &DMatrix<f64>) -> f64 {
        let m = 2 * self.baseline_terms;
        if m == 0 {
            return 0.0;
        }
        let off = theta.len() - m;
        let c = DMatrix::from_fn(m, m, |r, q| self.bin_var * inv[(off + r, off + q)]);
        let e = DVector::from_fn(m, |r, _| theta[off + r]);
        match c.cholesky() {
            Some(ch) => e.dot(&ch.solve(&e)),
            None => f64::INFINITY,
        }
    }

    fn cost(r: &[C64]) -> f64 {
        r.iter().map(|v| v.norm_sqr()).sum()
    }

    /// The fit by variable projection (G. H. Golub and V. Pereyra, "The
    /// differentiation of pseudo-inverses and nonlinear least squares
    /// problems whose variables separate", SIAM J. Numer. Anal. 10(2),
    /// 1973): the model is linear in the amplitudes and the baseline, so
    /// for given poles these are solved exactly (least squares by QR) and
    /// Levenberg–Marquardt moves the free poles alone on the projected
    /// residual P⊥(s)·d, with the Jacobian −P⊥·(∂Φ/∂s)·a of L. Kaufman ("A
    /// variable projection method for solving separable nonlinear least
    /// squares problems", BIT 15, 1975). The minimum is that of the full
    /// problem; it is reached in a few iterations where moving poles and
    /// amplitudes together crawled along their correlation. The
    /// covariance then comes from the full Jacobian ([`FitProblem::finish`]).
    fn solve(&mut self, free: &[C64], fixed: &[C64]) -> FitResult {
        let nfree = free.len();
        let mut poles = free.to_vec();
        let Some(mut at) = self.project(&poles, fixed) else {
            return self.solve_full(free, fixed);
        };
        let nb = self.data.len();
        let np = 2 * nfree + at.lin.len();
        let dof = ((2 * nb) as f64 - np as f64).max(1.0);
        let mut mu = 1e-3;
        let mut iterations = 0;
        let mut stop = StopReason::Converged;
        while nfree > 0 && iterations < MAX_ITERATIONS {
            iterations += 1;
            let j = &at.jacobian;
            let a = j.transpose() * j;
            let g = j.transpose() * &at.resid;
            let mut accepted = None;
            while mu < 1e12 {
                if let Some(step) = solve_damped(&a, &g, mu) {
                    let trial: Vec<C64> = poles
                        .iter()
                        .enumerate()
                        .map(|(c, s)| s + C64::new(step[2 * c], step[2 * c + 1]))
                        .collect();
                    if trial.iter().all(|s| s.re.is_finite() && s.im.is_finite()) {
                        if let Some(next) = self.project(&trial, fixed) {
                            if next.cost <= at.cost {
                                accepted = Some((trial, next));
                                break;
                            }
                        }
                    }
                }
                mu *= 4.0;
            }
            let Some((trial, next)) = accepted else {
                stop = StopReason::NoProgress;
                break;
            };
            mu = (mu / 3.0).max(1e-12);
            let old = at.cost;
            poles = trial;
            at = next;
            // A component grown broader than the window will be removed
            // (fit_with_rejection): no use polishing the others first.
            if poles.iter().any(|s| -s.re > self.broad_limit) {
                stop = StopReason::NoProgress;
                break;
            }
            // As in the full fit: the drop in χ² bounds the step's length
            // in standard errors (of the poles, with the amplitudes at
            // their best values for every pole position).
            let misfit = (at.cost / self.bin_var / dof).max(1.0);
            if (old - at.cost) / self.bin_var <= STEP_TOLERANCE_SE * STEP_TOLERANCE_SE * misfit {
                stop = StopReason::Converged;
                break;
            }
            if old - at.cost <= 1e-15 * old {
                stop = StopReason::NoProgress;
                break;
            }
            if iterations == MAX_ITERATIONS {
                stop = StopReason::MaxIterations;
            }
        }
        let mut theta = Vec::with_capacity(np);
        for s in &poles {
            theta.push(s.re);
            theta.push(s.im);
        }
        theta.extend(at.lin.iter());
        self.finish(&theta, nfree, fixed, iterations, stop)
    }

    /// The least-squares amplitudes and baseline for the given poles, the
    /// residual they leave and its Kaufman Jacobian in the free poles
    /// ([`FitProblem::solve`]). None when the linear columns are
    /// numerically dependent (two poles on top of each other).
    fn project(&self, free: &[C64], fixed: &[C64]) -> Option<Projection> {
        let nb = self.data.len();
        let nfree = free.len();
        let ncomp = nfree + fixed.len();
        let nlin = 2 * ncomp + 2 * self.baseline_terms;
        let rows = 2 * nb;
        if nlin > rows {
            return None;
        }
        let i_unit = C64::new(0.0, 1.0);
        let mut phi = DMatrix::<f64>::zeros(rows, nlin);
        // dG/ds of each free pole and of its image, per bin.
        let mut dgs: Vec<(Vec<C64>, Vec<C64>)> = Vec::with_capacity(nfree);
        for c in 0..ncomp {
            let s = if c < nfree { free[c] } else { fixed[c - nfree] };
            let es = s.exp();
            let zn = (s * self.n).exp();
            let (esc, znc) = (es.conj(), zn.conj());
            let mut dg = Vec::new();
            let mut dgi = Vec::new();
            if c < nfree {
                dg.reserve(nb);
                dgi.reserve(nb);
            }
            for k in 0..nb {
                let (g, gi) = if c < nfree {
                    let (g, d) = geometric(es, zn, self.w[k], self.n);
                    let (gi, di) = geometric(esc, znc, self.w[k], self.n);
                    dg.push(d);
                    dgi.push(di);
                    (g, gi)
                } else {
                    (
                        geometric_value(es, zn, self.w[k], self.n),
                        geometric_value(esc, znc, self.w[k], self.n),
                    )
                };
                let u = g + gi;
                let v = i_unit * (g - gi);
                phi[(k, 2 * c)] = u.re;
                phi[(nb + k, 2 * c)] = u.im;
                phi[(k, 2 * c + 1)] = v.re;
                phi[(nb + k, 2 * c + 1)] = v.im;
            }
            if c < nfree {
                dgs.push((dg, dgi));
            }
        }
        let eoff = 2 * ncomp;
        for p in 0..self.baseline_terms {
            for k in 0..nb {
                let tp = self.t[k].powi(p as i32);
                phi[(k, eoff + 2 * p)] = tp;
                phi[(nb + k, eoff + 2 * p + 1)] = tp;
            }
        }
        // Least squares by the normal equations with the columns scaled
        // to unit norm (Cholesky of the 2·comps + baseline Gram matrix;
        // a Householder QR of the tall Φ costs several times as much).
        let norms: Vec<f64> = phi.column_iter().map(|c| c.norm()).collect();
        if norms.iter().any(|&v| !(v > 0.0 && v.is_finite())) {
            return None;
        }
        for (j, &v) in norms.iter().enumerate() {
            phi.column_mut(j).unscale_mut(v);
        }
        let gram = phi.tr_mul(&phi);
        let chol = gram.cholesky()?;
        // Numerically dependent columns: the factor's smallest pivot.
        let l = chol.l_dirty();
        if (0..nlin).any(|i| l[(i, i)] <= 1e-6) {
            return None;
        }
        let d = &self.stacked;
        let lin_scaled = chol.solve(&phi.tr_mul(d));
        let resid = d - &phi * &lin_scaled;
        let cost = resid.norm_squared();
        let lin = DVector::from_fn(nlin, |j, _| lin_scaled[j] / norms[j]);
        // Kaufman's Jacobian of the model, P⊥·(∂Φ/∂s)·a, in the sign
        // convention of the full fit (residual = data − model).
        let mut jacobian = DMatrix::<f64>::zeros(rows, 2 * nfree);
        for (c, (dg, dgi)) in dgs.iter().enumerate() {
            let b = C64::new(lin[2 * c], lin[2 * c + 1]);
            for k in 0..nb {
                let d_sigma = b * dg[k] + b.conj() * dgi[k];
                let d_omega = i_unit * (b * dg[k] - b.conj() * dgi[k]);
                jacobian[(k, 2 * c)] = d_sigma.re;
                jacobian[(nb + k, 2 * c)] = d_sigma.im;
                jacobian[(k, 2 * c + 1)] = d_omega.re;
                jacobian[(nb + k, 2 * c + 1)] = d_omega.im;
            }
        }
        if nfree > 0 {
            let coef = chol.solve(&phi.tr_mul(&jacobian));
            jacobian -= &phi * coef;
        }
        Some(Projection {
            cost,
            lin,
            resid,
            jacobian,
        })
    }

    /// Levenberg–Marquardt on all parameters from the given poles, the
    /// linear ones starting at their least-squares values for those poles:
    /// the fallback of [`FitProblem::solve`] where the linear columns are
    /// degenerate at the start.
    fn solve_full(&mut self, free: &[C64], fixed: &[C64]) -> FitResult {
        let nfree = free.len();
        let ncomp = nfree + fixed.len();
        let np = 2 * nfree + 2 * ncomp + 2 * self.baseline_terms;
        let nb = self.data.len();
        let mut theta = vec![0.0; np];
        for (c, s) in free.iter().enumerate() {
            theta[2 * c] = s.re;
            theta[2 * c + 1] = s.im;
        }
        // Linear parameters by least squares at the starting poles: the
        // model is linear in them, so one Gauss–Newton step restricted to
        // them from zero is exact.
        let lin0 = 2 * nfree;
        let (r, j) = self.evaluate(&theta, nfree, fixed, true);
        let j = j.expect("asked for");
        let rv = stack(&r);
        let jl = j.columns(lin0, np - lin0).into_owned();
        if let Some(step) = solve_damped(&(jl.transpose() * &jl), &(jl.transpose() * &rv), 0.0) {
            for (i, v) in step.iter().enumerate() {
                theta[lin0 + i] += v;
            }
        }
        let mut mu = 1e-3;
        let mut iterations = 0;
        let mut stop = StopReason::MaxIterations;
        let (mut r, _) = self.evaluate(&theta, nfree, fixed, false);
        let mut cost = Self::cost(&r);
        let dof = ((2 * nb) as f64 - np as f64).max(1.0);
        while iterations < MAX_ITERATIONS {
            iterations += 1;
            let (_, j) = self.evaluate(&theta, nfree, fixed, true);
            let j = j.expect("asked for");
            let a = j.transpose() * &j;
            let g = j.transpose() * stack(&r);
            let mut accepted = None;
            while mu < 1e12 {
                if let Some(step) = solve_damped(&a, &g, mu) {
                    let trial: Vec<f64> =
                        theta.iter().zip(step.iter()).map(|(t, d)| t + d).collect();
                    if trial.iter().all(|v| v.is_finite()) {
                        let (rt, _) = self.evaluate(&trial, nfree, fixed, false);
                        let ct = Self::cost(&rt);
                        if ct <= cost {
                            accepted = Some((trial, rt, ct));
                            break;
                        }
                    }
                }
                mu *= 4.0;
            }
            let Some((trial, rt, ct)) = accepted else {
                stop = StopReason::NoProgress;
                break;
            };
            mu = (mu / 3.0).max(1e-12);
            theta = trial;
            r = rt;
            let old = cost;
            cost = ct;
            // The step's length in standard errors: the drop in χ² it
            // bought, (old − cost)/σ_bin², is its squared Mahalanobis
            // length δᵀ(JᵀJ/σ_bin²)δ for a Gauss–Newton step, which bounds
            // every parameter's (δ_i/SE_i)² (Cauchy–Schwarz), so no
            // inverse is needed to test it.
            // Where the model misfits (reduced χ² above 1) the standard
            // errors scale with it, and so does the tolerance.
            let misfit = (cost / self.bin_var / dof).max(1.0);
            let small =
                (old - cost) / self.bin_var <= STEP_TOLERANCE_SE * STEP_TOLERANCE_SE * misfit;
            if small || nfree == 0 {
                stop = StopReason::Converged;
                break;
            }
            if old - cost <= 1e-15 * old {
                stop = StopReason::NoProgress;
                break;
            }
        }
        self.finish(&theta, nfree, fixed, iterations, stop)
    }

    /// The fit's result at the solution θ: the covariance from the full
    /// Jacobian (poles, amplitudes and baseline together), each free
    /// component's significance and the baseline's Wald statistic.
    fn finish(
        &self,
        theta: &[f64],
        nfree: usize,
        fixed: &[C64],
        iterations: usize,
        stop: StopReason,
    ) -> FitResult {
        let np = theta.len();
        let nb = self.data.len();
        // Covariance at the solution.
        let (r, j) = self.evaluate(theta, nfree, fixed, true);
        let j = j.expect("asked for");
        let a = j.transpose() * &j;
        let inv = scaled_inverse(&a);
        let dof = (2 * nb) as f64 - np as f64;
        let reduced_chi2 = Self::cost(&r) / (2.0 * self.bin_var) / (dof / 2.0).max(1.0);
        let mut out = Vec::with_capacity(nfree);
        for c in 0..nfree {
            let s = C64::new(theta[2 * c], theta[2 * c + 1]);
            let boff = 2 * nfree + 2 * c;
            let b = C64::new(theta[boff], theta[boff + 1]);
            let (var_sigma, var_omega, amplitude_z) = match &inv {
                Some(inv) => {
                    let vs = self.bin_var * inv[(2 * c, 2 * c)];
                    let vo = self.bin_var * inv[(2 * c + 1, 2 * c + 1)];
                    // Variance of |b| by the delta method.
                    let (br, bi) = (b.re, b.im);
                    let m2 = b.norm_sqr().max(1e-300);
                    let v = self.bin_var
                        * (br * br * inv[(boff, boff)]
                            + bi * bi * inv[(boff + 1, boff + 1)]
                            + 2.0 * br * bi * inv[(boff, boff + 1)])
                        / m2;
                    (vs, vo, b.norm() / v.max(1e-300).sqrt())
                }
                None => (f64::INFINITY, f64::INFINITY, 0.0),
            };
            let growth_z = if s.re > 0.0 {
                s.re / var_sigma.sqrt()
            } else {
                0.0
            };
            out.push(FittedComponent {
                s,
                b,
                var_sigma,
                var_omega,
                amplitude_z,
                growth_z,
            });
        }
        FitResult {
            free: out,
            iterations,
            stop,
            reduced_chi2,
            baseline_wald: inv
                .as_ref()
                .map(|inv| self.baseline_wald(theta, inv))
                .unwrap_or(f64::INFINITY),
        }
    }
}

/// One variable-projection evaluation ([`FitProblem::project`]).
struct Projection {
    /// Σ residual², the cost of the full fit at these poles.
    cost: f64,
    /// Least-squares amplitudes and baseline, in θ's order.
    lin: DVector<f64>,
    /// Residual d − Φ·a, stacked (Re, then Im).
    resid: DVector<f64>,
    /// Projected Jacobian in the free poles (2·bins × 2·free).
    jacobian: DMatrix<f64>,
}

/// Real and imaginary parts stacked, matching the Jacobian's rows.
fn stack(r: &[C64]) -> DVector<f64> {
    let nb = r.len();
    DVector::from_fn(2 * nb, |i, _| if i < nb { r[i].re } else { r[i - nb].im })
}

/// Solves (A + μ·diag A)·x = g with A scaled to unit diagonal first
/// (Marquardt's scaling), by Cholesky; None when singular.
fn solve_damped(a: &DMatrix<f64>, g: &DVector<f64>, mu: f64) -> Option<DVector<f64>> {
    let np = a.nrows();
    let d: Vec<f64> = (0..np)
        .map(|i| {
            if a[(i, i)] > 0.0 {
                1.0 / a[(i, i)].sqrt()
            } else {
                0.0
            }
        })
        .collect();
    if d.contains(&0.0) {
        return None;
    }
    let mut s = DMatrix::from_fn(np, np, |r, c| a[(r, c)] * d[r] * d[c]);
    for i in 0..np {
        s[(i, i)] += mu;
    }
    let gs = DVector::from_fn(np, |i, _| g[i] * d[i]);
    let x = s.cholesky()?.solve(&gs);
    Some(DVector::from_fn(np, |i, _| x[i] * d[i]))
}

/// (A)⁻¹ through the same unit-diagonal scaling; None when singular.
fn scaled_inverse(a: &DMatrix<f64>) -> Option<DMatrix<f64>> {
    let np = a.nrows();
    let d: Vec<f64> = (0..np)
        .map(|i| {
            if a[(i, i)] > 0.0 {
                1.0 / a[(i, i)].sqrt()
            } else {
                0.0
            }
        })
        .collect();
    if d.contains(&0.0) {
        return None;
    }
    let s = DMatrix::from_fn(np, np, |r, c| a[(r, c)] * d[r] * d[c]);
    let inv = s.cholesky()?.inverse();
    Some(DMatrix::from_fn(np, np, |r, c| inv[(r, c)] * d[r] * d[c]))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::physics::synth::Rng;

    /// A real damped sinusoid sum plus white noise of variance σ².
    fn signal(
        fs: f64,
        n: usize,
        parts: &[(f64, f64, f64, f64)],
        sigma2: f64,
        rng: &mut Rng,
    ) -> Vec<f64> {
        let sd = sigma2.sqrt();
        (0..n)
            .map(|i| {
                let t = i as f64 / fs;
                parts
                    .iter()
                    .map(|&(f, a, alpha, ph)| {
                        a * (-alpha * t).exp() * (2.0 * PI * f * t + ph).cos()
                    })
                    .sum::<f64>()
                    + sd * rng.normal()
            })
            .collect()
    }

    fn alpha_of_t60(t60: f64) -> f64 {
        3.0 * LN_10 / t60
    }

    /// Seeded Monte Carlo of the estimator on single damped sinusoids
    /// (1.2 s span, T60 0.3 s, 20 dB SNR): the mean frequency error lies
    /// within 3 standard errors of zero (unbiased), the mean T60 within
    /// 5 % of the truth, and the reported uncertainty matches the scatter
    /// (their ratio within 0.75–1.33, a wide band for 60 trials). Seed 303
    /// gives a bias of −0.0008 Hz against an rms of 0.025 Hz, a mean T60
    /// of 0.2997 s and a mean u of 0.0235 Hz.
    #[test]
    fn issue_3_unbiased_with_decay_within_5_percent() {
        let fs = 48_000.0;
        let n = 57_600;
        let (a, t60) = (0.5, 0.3);
        let sigma2 = a * a / 2.0 / 10f64.powf(20.0 / 10.0);
        let mut rng = Rng::new(303);
        let mut planner = RealFftPlanner::new();
        let (mut errs, mut t60s, mut us) = (Vec::new(), Vec::new(), Vec::new());
        for _ in 0..60 {
            let f = 1000.0 + rng.uniform();
            let ph = 2.0 * PI * rng.uniform();
            let x = signal(fs, n, &[(f, a, alpha_of_t60(t60), ph)], sigma2, &mut rng);
            let fit = SpanAnalyser::new_with(&x, fs, sigma2, &mut planner).estimate(&BandConfig {
                centre_hz: 1000.5,
                half_width_hz: 20.0,
                max_order: 3,
            });
            assert_eq!(fit.components.len(), 1, "{fit:?}");
            let c = &fit.components[0];
            errs.push(c.frequency_hz - f);
            t60s.push(c.t60_s);
            us.push(c.frequency_u_hz);
        }
        let k = errs.len() as f64;
        let mean = errs.iter().sum::<f64>() / k;
        let rms = (errs.iter().map(|e| e * e).sum::<f64>() / k).sqrt();
        assert!(
            mean.abs() < 3.0 * rms / k.sqrt(),
            "bias {mean} Hz, rms {rms} Hz"
        );
        let mean_t60 = t60s.iter().sum::<f64>() / k;
        assert!((mean_t60 / t60 - 1.0).abs() < 0.05, "mean T60 {mean_t60} s");
        let mean_u = us.iter().sum::<f64>() / k;
        assert!(
            (0.75..1.33).contains(&(rms / mean_u)),
            "rms {rms}, mean u {mean_u}"
        );
    }

    /// Two equal damped partials 0.3/τ apart (τ = 1/α, T60 1.2 s, so
    /// 0.27 Hz against an FFT resolution of 0.83 Hz over the 1.2 s span) at
    /// 40 dB SNR: resolved — exactly two components, each within a quarter
    /// of the separation of its true frequency — in at least 18 of 20
    /// seeded trials (seed 3030 resolves all 20; the accuracy example
    /// measures about 94 % already at 0.25/τ).
    #[test]
    fn issue_3_resolves_a_pair_split_by_0_3_over_tau_at_40_db() {
        let fs = 48_000.0;
        let n = 57_600;
        let a = 0.5;
        let alpha = alpha_of_t60(1.2);
        let df = 0.3 * alpha / (2.0 * PI);
        let sigma2 = a * a / 2.0 / 10f64.powf(40.0 / 10.0);
        let mut rng = Rng::new(3030);
        let mut planner = RealFftPlanner::new();
        let mut resolved = 0;
        for _ in 0..20 {
            let f1 = 1000.0 + rng.uniform();
            let f2 = f1 + df;
            let parts = [
                (f1, a, alpha, 2.0 * PI * rng.uniform()),
                (f2, a, alpha, 2.0 * PI * rng.uniform()),
            ];
            let x = signal(fs, n, &parts, sigma2, &mut rng);
            let fit = SpanAnalyser::new_with(&x, fs, sigma2, &mut planner).estimate(&BandConfig {
                centre_hz: 0.5 * (f1 + f2),
                half_width_hz: 20.0,
                max_order: 3,
            });
            let c = &fit.components;
            if c.len() == 2
                && (c[0].frequency_hz - f1).abs() < df / 4.0
                && (c[1].frequency_hz - f2).abs() < df / 4.0
            {
                resolved += 1;
            }
        }
        assert!(resolved >= 18, "{resolved} of 20 resolved");
    }

    #[test]
    fn smooth_sizes() {
        assert_eq!(smooth_size_at_most(48_000), 48_000);
        assert_eq!(smooth_size_at_most(48_001), 48_000);
        assert_eq!(smooth_size_at_most(1023), 1000);
        assert_eq!(smooth_size_at_most(7), 6);
    }

    #[test]
    fn geometric_sum_matches_direct_sum_and_its_derivative() {
        let n = 500usize;
        let nf = n as f64;
        for &(s, k) in &[
            (C64::new(-1e-3, 0.2), 16i64),
            (C64::new(-2e-2, 2.0), 100),
            // Exactly on a bin, undamped: the series branch.
            (C64::new(0.0, 2.0 * PI * 37.0 / nf), 37),
            (C64::new(-1e-8, 2.0 * PI * 37.0 / nf + 1e-9), 37),
        ] {
            let w = C64::from_polar(1.0, -2.0 * PI * k as f64 / nf);
            let direct: C64 = (0..n)
                .map(|i| (s * i as f64).exp() * w.powu(i as u32))
                .sum();
            let ddirect: C64 = (0..n)
                .map(|i| (s * i as f64).exp() * w.powu(i as u32) * i as f64)
                .sum();
            let (g, dg) = geometric(s.exp(), (s * nf).exp(), w, nf);
            // Direct sums of 500 terms are good to ~1e−12 relative.
            assert!(
                (g - direct).norm() < 1e-9 * direct.norm().max(1.0),
                "{g} {direct}"
            );
            assert!(
                (dg - ddirect).norm() < 1e-9 * ddirect.norm().max(1.0),
                "{dg} {ddirect}"
            );
        }
    }

    /// The analytic Jacobian against central finite differences.
    #[test]
    fn jacobian_matches_finite_differences() {
        let fs = 8000.0;
        let mut rng = Rng::new(3);
        let x = signal(fs, 4000, &[(440.0, 0.5, 8.0, 0.3)], 1e-6, &mut rng);
        let an = SpanAnalyser::new(&x, fs, 1e-6);
        let nf = an.n as f64;
        let kc = (440.0 / (fs / nf)).round() as i64;
        let p = FitProblem::new(&an, kc - 20, kc + 20, kc, 20.0, 1e-6);
        let fixed = [C64::new(-3.0 / fs, 2.0 * PI * 452.0 / fs)];
        let theta = vec![
            -8.1 / fs,
            2.0 * PI * 440.2 / fs,
            60.0,
            -40.0,
            5.0,
            2.0,
            0.3,
            -0.2,
            0.1,
            0.05,
        ];
        let (_, j) = p.evaluate(&theta, 1, &fixed, true);
        let j = j.unwrap();
        for col in 0..theta.len() {
            let h = if col < 2 { 1e-7 } else { 1e-4 };
            let mut tp = theta.clone();
            let mut tm = theta.clone();
            tp[col] += h;
            tm[col] -= h;
            let (rp, _) = p.evaluate(&tp, 1, &fixed, false);
            let (rm, _) = p.evaluate(&tm, 1, &fixed, false);
            let fd = (stack(&rm) - stack(&rp)) / (2.0 * h);
            let an_col = j.column(col);
            let err = (fd - an_col).norm();
            // Central differences are good to ~h² relative; 1e−5 of the
            // column norm allows for rounding in the large bins.
            assert!(
                err < 1e-5 * an_col.norm().max(1e-12),
                "col {col}: {err} vs {}",
                an_col.norm()
            );
        }
    }

    #[test]
    fn pencil_recovers_noiseless_poles() {
        let z = [
            C64::from_polar(0.99, 0.3),
            C64::from_polar(0.97, -0.5),
            C64::from_polar(0.995, 0.33),
        ];
        let h = [C64::new(1.0, 0.5), C64::new(-0.3, 0.2), C64::new(0.4, -0.7)];
        // A trace of noise (1e−9) so that MDL has a noise subspace to
        // measure; exact data leave it undefined.
        let mut rng = Rng::new(2);
        let y: Vec<C64> = (0..60)
            .map(|m| {
                (0..3).map(|i| h[i] * z[i].powu(m)).sum::<C64>()
                    + C64::new(rng.normal(), rng.normal()) * 1e-9
            })
            .collect();
        let r = matrix_pencil(&y, 6, 0.0).unwrap();
        assert_eq!(r.mdl_order, 3, "{:?}", r.singular_values);
        for (zi, hi) in z.iter().zip(&h) {
            let (j, _) = r
                .poles
                .iter()
                .enumerate()
                .map(|(j, p)| (j, (p - zi).norm()))
                .min_by(|a, b| a.1.total_cmp(&b.1))
                .unwrap();
            // Noise of 1e−9 moves the poles by ~1e−9 over 60 samples;
            // 1e−7 leaves room for the conditioning of the close pair.
            assert!((r.poles[j] - zi).norm() < 1e-7, "{:?}", r.poles);
            assert!((r.amplitudes[j] - hi).norm() < 1e-6, "{:?}", r.amplitudes);
        }
    }

    #[test]
    fn pencil_of_pure_noise_has_order_zero() {
        let mut rng = Rng::new(11);
        let mut zero = 0;
        let trials = 200;
        for _ in 0..trials {
            let y: Vec<C64> = (0..96)
                .map(|_| C64::new(rng.normal(), rng.normal()) * std::f64::consts::FRAC_1_SQRT_2)
                .collect();
            let r = matrix_pencil(&y, 8, 1.0).unwrap();
            if r.poles.is_empty() {
                zero += 1;
            }
        }
        // The stated 99 % of NOISE_EDGE_FACTOR.
        assert!(zero as f64 >= 0.99 * trials as f64, "{zero}/{trials}");
    }

    #[test]
    fn single_component_is_found_with_its_parameters() {
        let fs = 48_000.0;
        let mut rng = Rng::new(5);
        let (f, a, t60, ph) = (1234.56, 0.3, 0.8, 0.9);
        let sigma2 = a * a / 2.0 / 10f64.powf(40.0 / 10.0);
        let x = signal(
            fs,
            48_000,
            &[(f, a, alpha_of_t60(t60), ph)],
            sigma2,
            &mut rng,
        );
        let fit = SpanAnalyser::new(&x, fs, sigma2).estimate(&BandConfig {
            centre_hz: 1234.0,
            half_width_hz: 20.0,
            max_order: 3,
        });
        assert_eq!(fit.components.len(), 1, "{fit:?}");
        let c = &fit.components[0];
        // 4 standard uncertainties: a single draw.
        assert!((c.frequency_hz - f).abs() < 4.0 * c.frequency_u_hz, "{c:?}");
        assert!((c.amplitude / a - 1.0).abs() < 0.01, "{c:?}");
        assert!((c.phase_rad - ph).abs() < 0.01, "{c:?}");
        assert!((c.t60_s / t60 - 1.0).abs() < 0.01, "{c:?}");
        assert!((c.snr_db - 40.0).abs() < 0.1, "{c:?}");
        // Isolated: the band-model bound is the single-component bound.
        assert!((c.frequency_u_hz / c.crlb_hz - 1.0).abs() < 0.05, "{c:?}");
        assert!((fit.reduced_chi2 - 1.0).abs() < 0.3, "{fit:?}");
    }
}
