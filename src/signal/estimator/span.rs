//! [`SpanAnalyser`]: one span transformed once, then estimated band by
//! band: pilot peak, windows, pencil, neighbours, fit.

use std::f64::consts::{LN_10, PI};

use realfft::RealFftPlanner;
use rustfft::FftPlanner;

use crate::signal::crlb;

use super::band_fit::*;
use super::config::*;
use super::pencil::*;

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
    pub(super) sample_rate_hz: f64,
    pub(super) n: usize,
    pub(super) noise_variance: f64,
    pub(super) spectrum: Vec<C64>,
    pub(super) planner: FftPlanner<f64>,
    pub(super) pencil_samples: usize,
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
    pub(super) fn bin(&self, k: i64) -> C64 {
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
        let mut problem = FitProblem::new(
            self.n,
            |k| self.bin(k),
            klo,
            khi,
            kc,
            fit_bins as f64,
            sigma2,
        );
        out.fit_bins = problem.data.len();

        let result = fit_and_prune(&mut problem, free, &fixed, &mut out);
        out.components = components(&result.free, in_band, fs, n, sigma2, band.max_order);
        out
    }

    /// Half-width (bins) at half power of the peak at `kp`, each side
    /// interpolated linearly in power and the two sides averaged; a side
    /// that stays above half power for `limit` bins counts as `limit`. A
    /// side that climbs again to [`VALLEY_RISE`] times its lowest power
    /// before reaching half power has run into a neighbour's peak: it
    /// ends at the valley (there the line is at least that narrow, and
    /// walking on would measure the neighbours, not the line).
    pub(super) fn half_power_half_width(&self, kp: i64, pmax: f64, limit: i64) -> f64 {
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
    pub(super) fn neighbour_poles(
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
    pub(super) fn parabolic_offset(&self, kp: i64) -> f64 {
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
    pub(super) fn quartile_noise(&self, kc: i64, half: i64) -> f64 {
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
    pub(super) fn pencil(
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

/// Steps 4–5: fits, drops insignificant components and refits; then drops
/// the baseline unless it is significant. Records the counts in `out`.
fn fit_and_prune(
    problem: &mut FitProblem,
    free: Vec<C64>,
    fixed: &[C64],
    out: &mut BandFit,
) -> PoleFit {
    let (mut result, mut rejected, iters) = fit_with_rejection(problem, free, fixed);
    out.iterations += iters;
    if !result.free.is_empty() && result.baseline_wald < BASELINE_CHI2 {
        let start: Vec<C64> = result.free.iter().map(|c| c.s).collect();
        problem.baseline_terms = 0;
        let (plain, plain_rejected, iters) = fit_with_rejection(problem, start, fixed);
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
    result
}

/// The fitted components inside the band, as reported: the `max_order`
/// strongest, in rising frequency.
fn components(
    free: &[FittedComponent],
    in_band: impl Fn(&C64) -> bool,
    fs: f64,
    n: usize,
    sigma2: f64,
    max_order: usize,
) -> Vec<DampedComponent> {
    let freq = |s: C64| s.im * fs / (2.0 * PI);
    let mut comps: Vec<DampedComponent> = free
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
    comps.truncate(max_order);
    comps.sort_by(|a, b| a.frequency_hz.total_cmp(&b.frequency_hz));
    comps
}
