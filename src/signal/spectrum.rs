//! Spectrum of the analysed span and its noise floor.
//!
//! Conventions:
//! - Window: raised-cosine fade-in over the first [`FADE_IN_FRACTION`] of
//!   the span and fade-out over the last [`FADE_OUT_FRACTION`], flat in
//!   between. A short fade-in keeps the strong early part of a fast decay;
//!   an abrupt start would give every partial long 1/Δf skirts that pull
//!   its weaker neighbours' peaks by tenths of a hertz (measured on
//!   synthetic panels: −0.5 % in tension with a 2 ms fade-in, within
//!   0.15 % with 10 %).
//! - Zero-padded to at least [`ZERO_PAD_FACTOR`] times the span, rounded up
//!   to a size of the form 2^a·3^b so the FFT stays fast.
//! - One-sided spectrum, bin k at k·fs/N Hz.
//! - Level in dB re a full-scale sine: 20·log10(2|X_k| / Σw), so a sine of
//!   amplitude A at a bin centre reads 20·log10(A).
//! - Noise floor: the lower quartile of |X_k|² over a window of ±1/6
//!   octave, divided by ln(4/3) (the p-quantile of an exponential
//!   distribution, which is the distribution of |X_k|² for Gaussian noise,
//!   is −ln(1−p) times its mean). The lower quartile rather than the median
//!   keeps the floor down where the skirts of strong decaying partials fill
//!   the window.

use realfft::RealFftPlanner;
use serde::Serialize;

/// Zero padding: FFT length at least this many times the span.
pub const ZERO_PAD_FACTOR: usize = 2;
/// Fraction of the span faded in at its start.
pub const FADE_IN_FRACTION: f64 = 0.1;
/// Fraction of the span tapered at its end.
pub const FADE_OUT_FRACTION: f64 = 0.4;
/// Half-width of the noise-floor median window, in octaves.
pub const FLOOR_HALF_WIDTH_OCT: f64 = 1.0 / 6.0;

/// −ln(1 − 1/4): the lower quartile of an exponential distribution over its mean.
pub const FLOOR_QUANTILE_TO_MEAN: f64 = 0.287_682_072_451_780_9;

/// A one-sided power spectrum with its noise floor.
#[derive(Debug, Clone)]
pub struct Spectrum {
    /// Bin spacing in Hz.
    pub bin_hz: f64,
    /// |X_k|² for k = 0..=N/2.
    pub power: Vec<f64>,
    /// Estimated mean noise power per bin (same scale as `power`).
    pub floor_power: Vec<f64>,
    /// Sum of the window, for level scaling.
    pub window_sum: f64,
    /// Sum of the squared window, for noise scaling.
    pub window_sq_sum: f64,
    /// Samples in the analysed span.
    pub span_len: usize,
    /// FFT length.
    pub fft_len: usize,
    /// How the floor was estimated.
    pub floor_source: FloorSource,
    /// The background before the tap, when there was one.
    pub background: Option<Background>,
}

impl Spectrum {
    /// Noise floor in dB re a full-scale sine, at bin `k`.
    pub fn floor_db(&self, k: usize) -> f64 {
        self.power_to_db(self.floor_power[k.min(self.floor_power.len() - 1)])
    }

    /// Level of bin `k` in dB re a full-scale sine.
    pub fn level_db(&self, k: usize) -> f64 {
        self.power_to_db(self.power[k.min(self.power.len() - 1)])
    }

    /// Converts a bin power to dB re a full-scale sine.
    pub fn power_to_db(&self, p: f64) -> f64 {
        10.0 * (4.0 * p / (self.window_sum * self.window_sum) + 1e-30).log10()
    }

    /// Bin index nearest to a frequency.
    pub fn bin_of(&self, f_hz: f64) -> usize {
        ((f_hz / self.bin_hz).round().max(0.0) as usize).min(self.power.len() - 1)
    }
}

/// The analysis window for a span of `n` samples.
pub fn window(n: usize) -> Vec<f64> {
    let fade_in = ((FADE_IN_FRACTION * n as f64) as usize).max(1);
    let fade_out = ((FADE_OUT_FRACTION * n as f64) as usize).max(1);
    let mut w = vec![1.0; n];
    // Rising half of a raised cosine over the first `fade_in` samples,
    // 0.5 − 0.5·cos(π(i + ½)/fade_in), and its mirror over the last
    // `fade_out` (the two multiply where they overlap).
    let pi = std::f64::consts::PI;
    for (i, c) in cosines(
        fade_in.min(n),
        0.5 * pi / fade_in as f64,
        pi / fade_in as f64,
    )
    .into_iter()
    .enumerate()
    {
        w[i] *= 0.5 - 0.5 * c;
    }
    for (k, c) in cosines(
        fade_out.min(n),
        0.5 * pi / fade_out as f64,
        pi / fade_out as f64,
    )
    .into_iter()
    .enumerate()
    {
        w[n - 1 - k] *= 0.5 - 0.5 * c;
    }
    w
}

/// The Hann frame of `frame` samples, 0.5 − 0.5·cos(2πi/frame) (periodic
/// form, for overlapped frames).
pub fn hann(frame: usize) -> Vec<f64> {
    let step = 2.0 * std::f64::consts::PI / frame.max(1) as f64;
    cosines(frame, 0.0, step)
        .into_iter()
        .map(|c| 0.5 - 0.5 * c)
        .collect()
}

/// cos(θ₀ + i·Δ) for i in 0..count, by rotating a unit phasor (one
/// complex product a sample instead of a cosine), renormalised every 64
/// steps so that rounding cannot build up: the error stays near 1e-15,
/// far below anything a window's shape changes.
pub fn cosines(count: usize, theta0: f64, step: f64) -> Vec<f64> {
    let (s0, c0) = theta0.sin_cos();
    let (ds, dc) = step.sin_cos();
    let (mut re, mut im) = (c0, s0);
    let mut out = Vec::with_capacity(count);
    for i in 0..count {
        if i % 64 == 0 && i > 0 {
            // Exact phase again, not only the norm: no drift at all.
            let (s, c) = (theta0 + i as f64 * step).sin_cos();
            re = c;
            im = s;
        }
        out.push(re);
        let next_re = re * dc - im * ds;
        im = re * ds + im * dc;
        re = next_re;
    }
    out
}

/// Smallest 2^a·3^b ≥ n.
pub fn fast_size(n: usize) -> usize {
    let mut best = n.next_power_of_two();
    let mut p3 = 1usize;
    while p3 < best {
        let mut v = p3;
        while v < n {
            v *= 2;
        }
        best = best.min(v);
        p3 *= 3;
    }
    best
}

/// Windowed, zero-padded power spectrum of `span` with its noise floor.
///
/// # Panics
/// Never for a non-empty span; an empty span gives a one-bin spectrum.
pub fn compute(
    span: &[f64],
    noise: Option<&[f64]>,
    sample_rate_hz: f64,
    planner: &mut RealFftPlanner<f64>,
) -> Spectrum {
    let n = span.len().max(1);
    let w = window(n);
    let fft_len = fast_size(ZERO_PAD_FACTOR * n).max(16);
    let fft = planner.plan_fft_forward(fft_len);
    let mut input = fft.make_input_vec();
    for (i, (&x, &wi)) in span.iter().zip(&w).enumerate() {
        input[i] = x * wi;
    }
    let mut output = fft.make_output_vec();
    // Lengths come from make_input_vec/make_output_vec, so this cannot fail.
    fft.process(&mut input, &mut output)
        .expect("buffers sized by the planner");
    let power: Vec<f64> = output.iter().map(|c| c.norm_sqr()).collect();
    let window_sum: f64 = w.iter().sum();
    let window_sq_sum: f64 = w.iter().map(|x| x * x).sum();
    let bin_hz = sample_rate_hz / fft_len as f64;
    let background = noise.and_then(|seg| noise_density(seg, sample_rate_hz, planner));
    let (floor_power, floor_source) = match &background {
        Some(b) => {
            let floor = interpolate_onto(&b.grid_hz, &b.density, bin_hz, power.len())
                .into_iter()
                .map(|d| d * window_sq_sum)
                .collect();
            let seconds = noise
                .map(|s| s.len() as f64 / sample_rate_hz)
                .unwrap_or(0.0);
            (floor, FloorSource::Background { seconds })
        }
        None => (
            noise_floor(&power, bin_hz, ZERO_PAD_FACTOR),
            FloorSource::SpanQuantile,
        ),
    };
    Spectrum {
        bin_hz,
        power,
        floor_power,
        window_sum,
        window_sq_sum,
        span_len: n,
        fft_len,
        floor_source,
        background,
    }
}

/// Where the noise floor came from.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
#[serde(tag = "source", rename_all = "snake_case")]
pub enum FloorSource {
    /// Measured on the background before the tap (Welch average).
    Background {
        /// Length of background used, s.
        seconds: f64,
    },
    /// Estimated from the tap spectrum itself (lower quartile), which
    /// overstates the noise where the skirts of strong partials fill the
    /// window.
    SpanQuantile,
}

/// Shortest background segment used for the noise floor, samples.
pub const MIN_NOISE_SAMPLES: usize = 512;

/// Noise variance density per sample, as a function of frequency, from a
/// stretch of background: Welch's averaged periodogram (P. D. Welch, "The
/// use of fast Fourier transform for the estimation of power spectra",
/// IEEE Trans. Audio Electroacoust. 15(2), 1967) with Hann frames at 50 %
/// overlap, then a running median over ±1/6 octave so that steady lines
/// (hum) in the background do not raise the floor. An average of K
/// periodograms is Gamma-distributed with 2K degrees of freedom; its median
/// over its mean is (1 − 1/(9K))³ by the Wilson–Hilferty approximation
/// (E. B. Wilson and M. M. Hilferty, PNAS 17, 1931), which corrects the
/// median to a mean. Returns (frequency grid Hz, variance per sample).
pub fn noise_density(
    seg: &[f64],
    sample_rate_hz: f64,
    planner: &mut RealFftPlanner<f64>,
) -> Option<Background> {
    if seg.len() < MIN_NOISE_SAMPLES {
        return None;
    }
    // The longest frame the background holds (up to 8192 samples): fine
    // frequency resolution matters more here than many averages, since the
    // floor is smoothed across frequency afterwards.
    let mut frame = 256usize;
    while frame * 2 <= 8192 && frame * 2 <= seg.len() {
        frame *= 2;
    }
    let hop = frame / 2;
    let k_frames = (seg.len() - frame) / hop + 1;
    let hann = hann(frame);
    let wsq: f64 = hann.iter().map(|x| x * x).sum();
    let fft = planner.plan_fft_forward(frame);
    let mut input = fft.make_input_vec();
    let mut output = fft.make_output_vec();
    let mut acc = vec![0.0; output.len()];
    for j in 0..k_frames {
        for (i, v) in input.iter_mut().enumerate() {
            *v = seg[j * hop + i] * hann[i];
        }
        // Buffers come from the planner, so processing cannot fail.
        fft.process(&mut input, &mut output)
            .expect("buffers sized by the planner");
        for (a, c) in acc.iter_mut().zip(&output) {
            *a += c.norm_sqr();
        }
    }
    // Half-overlapped Hann frames are correlated (overlap correlation
    // 0.167; F. J. Harris, "On the use of windows for harmonic analysis
    // with the discrete Fourier transform", Proc. IEEE 66(1), 1978,
    // Table 1), which raises the variance of the average by 1 + 2·0.167².
    let k_eff = (k_frames as f64 / (1.0 + 2.0 * 0.167 * 0.167)).max(1.0);
    let bin_hz = sample_rate_hz / frame as f64;
    let density: Vec<f64> = acc.iter().map(|a| a / k_frames as f64 / wsq).collect();
    // The lower quartile, so that hum lines and their Hann skirts in the
    // background do not lift the floor; Wilson–Hilferty for the quartile
    // of a chi-square with k = 2K degrees of freedom over its mean:
    // (1 − 2/(9k) + z·√(2/(9k)))³ with z = −0.674 (the normal quartile).
    let quartile = running_quantile(&density, bin_hz, 1, 0.25, 6);
    let k = 2.0 * k_eff;
    let ratio = (1.0 - 2.0 / (9.0 * k) - 0.674_49 * (2.0 / (9.0 * k)).sqrt())
        .powi(3)
        .max(0.05);
    let grid: Vec<f64> = (0..density.len()).map(|k| k as f64 * bin_hz).collect();
    let hann_sum: f64 = hann.iter().sum();
    let line_level_db = acc
        .iter()
        .map(|a| 10.0 * (4.0 * a / k_frames as f64 / (hann_sum * hann_sum) + 1e-30).log10())
        .collect();
    Some(Background {
        grid_hz: grid,
        density: quartile.iter().map(|m| (m / ratio).max(1e-300)).collect(),
        line_level_db,
        bin_hz,
        frame_sums: (hann_sum, wsq),
    })
}

/// What the background before the tap holds.
#[derive(Debug, Clone)]
pub struct Background {
    /// Frequency grid, Hz.
    pub grid_hz: Vec<f64>,
    /// Smoothed noise variance per sample on the grid.
    pub density: Vec<f64>,
    /// Level a steady sine would read at each grid bin, dB re a full-scale
    /// sine (the averaged periodogram with coherent-gain scaling).
    pub line_level_db: Vec<f64>,
    /// Grid spacing, Hz.
    pub bin_hz: f64,
    /// Σw and Σw² of the Welch frame, for converting the density to a level.
    pub frame_sums: (f64, f64),
}

impl Background {
    /// Level that the background's noise alone reads at `f_hz` on the same
    /// scale as [`Background::level_near`], dB.
    pub fn noise_level_near(&self, f_hz: f64) -> f64 {
        let k = ((f_hz / self.bin_hz).round() as usize).min(self.density.len() - 1);
        let (s, sq) = self.frame_sums;
        10.0 * (4.0 * self.density[k] * sq / (s * s) + 1e-30).log10()
    }

    /// Level of steady sound at the bin nearest `f_hz`, dB.
    pub fn level_near(&self, f_hz: f64) -> f64 {
        let k = ((f_hz / self.bin_hz).round() as usize).min(self.line_level_db.len() - 1);
        self.line_level_db[k]
    }
}

/// Linear interpolation of (grid, values) onto the points k·step,
/// k = 0..n, clamped at the ends; one pass over both grids.
fn interpolate_onto(grid: &[f64], values: &[f64], step: f64, n: usize) -> Vec<f64> {
    let mut out = Vec::with_capacity(n);
    let mut j = 0;
    for k in 0..n {
        let x = k as f64 * step;
        while j < grid.len() && grid[j] < x {
            j += 1;
        }
        out.push(if j == 0 {
            values[0]
        } else if j >= grid.len() {
            values[values.len() - 1]
        } else {
            let (x0, x1) = (grid[j - 1], grid[j]);
            let a = (x - x0) / (x1 - x0);
            values[j - 1] * (1.0 - a) + values[j] * a
        });
    }
    out
}

/// Robust noise floor: running lower quartile over ±1/6 octave, evaluated at
/// 24 points per octave and interpolated in dB between them. Only every
/// `stride`-th bin enters the quantile (zero padding makes neighbours
/// correlated, so the others add cost, not information).
pub fn noise_floor(power: &[f64], bin_hz: f64, stride: usize) -> Vec<f64> {
    running_quantile(power, bin_hz, stride, 0.25, 20 * stride)
        .into_iter()
        .map(|q| q / FLOOR_QUANTILE_TO_MEAN)
        .collect()
}

/// The `q`-quantile of `power` over ±1/6 octave (at least `min_half_bins`
/// either side), at 24 points per octave, interpolated in log between.
pub fn running_quantile(
    power: &[f64],
    bin_hz: f64,
    stride: usize,
    q: f64,
    min_half_bins: usize,
) -> Vec<f64> {
    let nb = power.len();
    let stride = stride.max(1);
    let mut centres: Vec<usize> = Vec::new();
    // At low frequency the window keeps a minimum width in bins, so that it
    // reaches past the peaks' own skirts.
    let min_half_bins = min_half_bins.max((10.0 / bin_hz).ceil() as usize);
    let mut f = bin_hz.max(1.0);
    let top = bin_hz * (nb - 1) as f64;
    while f < top {
        centres.push((f / bin_hz).round() as usize);
        f *= 2f64.powf(1.0 / 24.0);
    }
    centres.push(nb - 1);
    centres.dedup();
    let ratio = 2f64.powf(FLOOR_HALF_WIDTH_OCT);
    let mut scratch = Vec::new();
    let mut values: Vec<(usize, f64)> = Vec::with_capacity(centres.len());
    for &c in &centres {
        let half_lo = ((c as f64) * (1.0 - 1.0 / ratio)) as usize;
        let half_hi = ((c as f64) * (ratio - 1.0)) as usize;
        let lo = c.saturating_sub(half_lo.max(min_half_bins)).max(1);
        let hi = (c + half_hi.max(min_half_bins)).min(nb - 1);
        scratch.clear();
        let mut k = lo;
        while k <= hi {
            scratch.push(power[k]);
            k += stride;
        }
        if scratch.is_empty() {
            values.push((c, power[c.min(nb - 1)]));
            continue;
        }
        let idx = ((scratch.len() as f64 * q) as usize).min(scratch.len() - 1);
        let (_, m, _) = scratch.select_nth_unstable_by(idx, f64::total_cmp);
        values.push((c, *m));
    }
    let mut floor = vec![0.0; nb];
    let mut seg = 0;
    for (k, out) in floor.iter_mut().enumerate() {
        while seg + 1 < values.len() && values[seg + 1].0 <= k {
            seg += 1;
        }
        let (k0, v0) = values[seg];
        if seg + 1 >= values.len() || k <= k0 {
            *out = v0.max(1e-300);
            continue;
        }
        let (k1, v1) = values[seg + 1];
        let a = (k - k0) as f64 / (k1 - k0).max(1) as f64;
        let l = (1.0 - a) * v0.max(1e-300).ln() + a * v1.max(1e-300).ln();
        *out = l.exp();
    }
    floor
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn fast_sizes() {
        assert_eq!(fast_size(1000), 1024);
        assert_eq!(fast_size(1100), 1152);
        assert_eq!(fast_size(4 * 48000), 196_608);
        assert!(fast_size(7) >= 7);
    }

    #[test]
    fn sine_level_reads_its_amplitude() {
        let sr = 48000.0;
        let n = 48000;
        // 1000 Hz falls on a bin centre of the padded grid.
        let x: Vec<f64> = (0..n)
            .map(|i| 0.5 * (2.0 * std::f64::consts::PI * 1000.0 * i as f64 / sr).sin())
            .collect();
        let mut planner = RealFftPlanner::new();
        let s = compute(&x, None, sr, &mut planner);
        let k = s.bin_of(1000.0);
        let peak = (k - 3..=k + 3)
            .map(|j| s.level_db(j))
            .fold(f64::MIN, f64::max);
        // 20·log10(0.5) = −6.02 dB; 0.05 dB covers the grid offset.
        assert!((peak + 6.0206).abs() < 0.05, "{peak}");
    }

    #[test]
    fn floor_of_white_noise_is_its_mean_power() {
        // Uniform noise from a fixed-seed generator, variance 1/12.
        let mut state = 99u64;
        let x: Vec<f64> = (0..32768)
            .map(|_| {
                state = state
                    .wrapping_mul(6364136223846793005)
                    .wrapping_add(1442695040888963407);
                (state >> 11) as f64 / (1u64 << 53) as f64 - 0.5
            })
            .collect();
        let w = window(x.len());
        let mut planner = RealFftPlanner::new();
        let s = compute(&x, None, 48000.0, &mut planner);
        let expect = s.window_sq_sum / 12.0;
        let mid = s.floor_power[s.power.len() / 2];
        // The median of ~thousands of bins is good to a few percent; 10 %
        // allows for the correlation between padded bins.
        assert!((mid / expect - 1.0).abs() < 0.1, "{} vs {}", mid, expect);
        assert_eq!(w.len(), x.len());
        // The same noise as background: the Welch floor must agree too.
        let s2 = compute(&x[..16384], Some(&x[16384..]), 48000.0, &mut planner);
        let expect2 = s2.window_sq_sum / 12.0;
        let mid2 = s2.floor_power[s2.power.len() / 2];
        assert!(
            (mid2 / expect2 - 1.0).abs() < 0.1,
            "{} vs {}",
            mid2,
            expect2
        );
        assert!(matches!(s2.floor_source, FloorSource::Background { .. }));
    }
}
