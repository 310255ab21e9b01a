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

mod band_fit;
mod config;
mod pencil;
mod span;

pub use config::{
    BandConfig, BandFit, DampedComponent, StopReason, BASELINE_CHI2, BASELINE_DEGREE,
    DELAY_EDGE_LENGTHS, EXTRA_PENCIL_ORDER, FIT_WINDOW_HALF_WIDTHS, MAX_ITERATIONS,
    MAX_PENCIL_SAMPLES, MAX_SPAN_SAMPLES, MIN_AMPLITUDE_Z, MIN_PENCIL_ENERGY, MIN_PENCIL_SAMPLES,
    MIN_SPAN_SAMPLES, NEIGHBOUR_CURVATURE_NOISE, NEIGHBOUR_MIN_SNR, NEIGHBOUR_PEAK_GUARD_BINS,
    NEIGHBOUR_PROMINENCE, NEIGHBOUR_REACH_HZ, NEIGHBOUR_REACH_WINDOWS, NOISE_EDGE_FACTOR,
    STEP_TOLERANCE_SE, TAPER_EDGE_PER_DECAY, VALLEY_RISE,
};
pub use pencil::{matrix_pencil, mdl_order, PencilResult};
#[cfg(test)]
pub use span::estimate_band;
pub use span::{smooth_size_at_most, SpanAnalyser};

#[cfg(test)]
mod tests {
    use super::band_fit::*;
    use super::config::*;
    use super::pencil::*;
    use super::span::*;
    use crate::physics::synth::Rng;
    use realfft::RealFftPlanner;
    use std::f64::consts::{LN_10, PI};

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
        let p = FitProblem::new(an.n, |k| an.bin(k), kc - 20, kc + 20, kc, 20.0, 1e-6);
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
