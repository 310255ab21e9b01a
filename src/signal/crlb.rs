//! Cramér–Rao lower bounds (CRLB) on the frequency and decay rate of one
//! exponentially damped sinusoid in white Gaussian noise.
//!
//! Conventions: the signal is x\[n\] = A·e^(−α·n/fs)·cos(2π·f·n/fs + φ) + w\[n\],
//! n = 0..N−1, with A the initial amplitude (full-scale units), α the
//! amplitude decay rate in 1/s (T60 = 3·ln 10/α), f in Hz, φ in rad, and
//! w\[n\] real white Gaussian noise of variance σ² per sample. Internally
//! time is counted in samples: a = α/fs (1/sample), ω = 2π·f/fs
//! (rad/sample). Every bound is returned as a standard deviation (the
//! square root of the variance bound) in the unit of the parameter.
//!
//! Two forms are given:
//!
//! - [`crlb_frequency_hz`]: closed form. The Fisher information matrix
//!   (FIM) of the complex model A·e^(−a·n)·e^(i(ωn+φ)) splits into an
//!   (A, a) block and an (ω, φ) block whose entries are the sums
//!   S_k = Σ n^k·z^n, z = e^(−2a), k = 0, 1, 2. Eliminating φ leaves
//!   var(ω) ∝ S₀/(S₀S₂ − S₁²) = 1/(S₀·V), where V is the variance of n
//!   under the truncated geometric weights z^n; V has the closed form
//!   V = ¼·[1/sinh²(a) − N²/sinh²(N·a)]
//!   (the second derivative of log Σ z^n with respect to 2a). A real
//!   sinusoid away from 0 and fs/2 carries half its power at +f, so its
//!   bound is that of the complex model with amplitude A/2:
//!   var(ω) = 2σ²/(A²·S₀·V). At a = 0 this is 24σ²/(A²·N·(N²−1)), the
//!   bound of D. C. Rife and R. R. Boorstyn, "Single-tone parameter
//!   estimation from discrete-time observations", IEEE Trans. Inf. Theory
//!   20(5), 1974, and S. M. Kay, "Fundamentals of Statistical Signal
//!   Processing: Estimation Theory", 1993, eq. (3.41):
//!   var(f̂) ≥ 12·fs²/((2π)²·η·N·(N²−1)) with η = A²/(2σ²). The derivation
//!   of the damped sums is the one in Y. X. Yao and S. M. Pandit,
//!   "Cramér–Rao lower bounds for a damped sinusoidal process", IEEE
//!   Trans. Signal Process. 43(4), 1995, in the limit where the terms at
//!   twice the frequency are dropped.
//! - [`crlb_frequency_numeric`]: the exact 4×4 FIM of the real model for
//!   θ = (A, a, ω, φ), J_ij = (1/σ²)·Σ_n ∂s/∂θ_i·∂s/∂θ_j (Kay 1993,
//!   eq. (3.33), white Gaussian noise), from analytic derivatives summed
//!   over n, inverted with nalgebra (Yao and Pandit 1995 give the same
//!   matrix). It keeps the double-frequency terms, so it differs from the
//!   closed form when f is within a few line widths of 0 or fs/2.
//!
//! For the complex model the (A, a) block has the same determinant
//! structure as the (ω, φ) block, so var(a) = var(ω) exactly: the decay
//! rate bound in 1/s equals 2π times the frequency bound in Hz
//! ([`crlb_decay_rate_per_s`]).

use nalgebra::Matrix4;
use std::f64::consts::PI;

/// Below this value of N·a (a = α/fs, the amplitude decay per sample)
/// the variance V of the truncated geometric weights is
/// taken from its series, V = (N²−1)/12 − (N⁴−1)·(2a)²/240 + O((Na)⁴N²),
/// whose next term is smaller than 1e−8 relative there; above it the sinh
/// form loses at most about 48·ε/(2Na)² ≈ 1e−10 relative to cancellation.
const SERIES_BELOW_NA: f64 = 5e-3;

/// Σ_{n=0}^{N−1} z^n with z = e^(−2a): (1 − e^(−2aN))/(1 − e^(−2a)),
/// written with expm1 so it stays exact as a → 0 (where it tends to N).
fn weight_sum(a: f64, n: usize) -> f64 {
    let nf = n as f64;
    if a * nf < 1e-12 {
        return nf;
    }
    (-2.0 * a * nf).exp_m1() / (-2.0 * a).exp_m1()
}

/// Variance of n under the weights z^n = e^(−2an), n = 0..N−1:
/// V = ¼·[1/sinh²(a) − N²/sinh²(N·a)] (see the module notes), with the
/// series of [`SERIES_BELOW_NA`] near a = 0.
fn weighted_variance(a: f64, n: usize) -> f64 {
    let nf = n as f64;
    if n < 2 {
        return 0.0;
    }
    if a * nf < SERIES_BELOW_NA {
        let l = 2.0 * a;
        return (nf * nf - 1.0) / 12.0 - (nf.powi(4) - 1.0) * l * l / 240.0;
    }
    let s1 = a.sinh();
    let sn = (a * nf).sinh();
    // sinh(N·a) overflows to infinity for very long records; the second
    // term is then zero, which is its limit.
    0.25 * (1.0 / (s1 * s1) - nf * nf / (sn * sn))
}

/// Closed-form CRLB (standard deviation, Hz) on the frequency of one real
/// damped sinusoid in real white Gaussian noise.
///
/// var(ω̂) ≥ 2σ²/(A²·S₀·V), σ_f = (fs/2π)·√var(ω̂), with
/// S₀ = Σ_{n<N} e^(−2an), V = ¼[1/sinh²(a) − N²/sinh²(Na)], a = α/fs
/// (module notes; Yao and Pandit 1995; Rife and Boorstyn 1974 at α = 0).
///
/// - `amplitude`: initial amplitude A (same unit as the samples).
/// - `decay_rate_per_s`: amplitude decay rate α, 1/s (0 for a steady sine).
/// - `sample_rate_hz`: fs.
/// - `n`: number of samples N.
/// - `noise_variance`: σ² per sample (the square of the sample unit).
///
/// Valid when f lies several line widths (α/π Hz) and several 1/N·fs away
/// from 0 and fs/2; elsewhere use [`crlb_frequency_numeric`]. Returns
/// infinity when there is no information (N < 2, A = 0).
pub fn crlb_frequency_hz(
    amplitude: f64,
    decay_rate_per_s: f64,
    sample_rate_hz: f64,
    n: usize,
    noise_variance: f64,
) -> f64 {
    let var_w = frequency_variance_rad(
        amplitude,
        decay_rate_per_s / sample_rate_hz,
        n,
        noise_variance,
    );
    var_w.sqrt() * sample_rate_hz / (2.0 * PI)
}

/// Closed-form CRLB (standard deviation, 1/s) on the amplitude decay rate
/// α of one real damped sinusoid: var(â) = var(ω̂) for this model (module
/// notes), so σ_α = fs·√var(ω̂) = 2π·[`crlb_frequency_hz`].
pub fn crlb_decay_rate_per_s(
    amplitude: f64,
    decay_rate_per_s: f64,
    sample_rate_hz: f64,
    n: usize,
    noise_variance: f64,
) -> f64 {
    let var_w = frequency_variance_rad(
        amplitude,
        decay_rate_per_s / sample_rate_hz,
        n,
        noise_variance,
    );
    var_w.sqrt() * sample_rate_hz
}

/// var(ω̂) in (rad/sample)², the closed form 2σ²/(A²·S₀·V).
fn frequency_variance_rad(amplitude: f64, a: f64, n: usize, noise_variance: f64) -> f64 {
    let info = amplitude * amplitude * weight_sum(a, n) * weighted_variance(a, n);
    // NaN or non-positive information: no bound.
    if info.is_nan() || info <= 0.0 {
        return f64::INFINITY;
    }
    2.0 * noise_variance / info
}

/// The exact Fisher information matrix of the real model
/// s\[n\] = A·e^(−a·n)·cos(ω·n + φ) for θ = (A, a, ω, φ), with a in
/// 1/sample and ω in rad/sample:
/// J_ij = (1/σ²)·Σ_{n<N} ∂s/∂θ_i·∂s/∂θ_j (Kay 1993, eq. (3.33)), where
/// ∂s/∂A = e^(−an)·cos ψ, ∂s/∂a = −n·A·e^(−an)·cos ψ,
/// ∂s/∂ω = −n·A·e^(−an)·sin ψ, ∂s/∂φ = −A·e^(−an)·sin ψ, ψ = ωn + φ.
/// The sums are taken sample by sample (O(N)); the phase and the decay
/// advance by a rotation, one complex multiply per sample.
pub fn fisher_matrix_real(
    amplitude: f64,
    decay_per_sample: f64,
    omega_rad_per_sample: f64,
    phase_rad: f64,
    n: usize,
    noise_variance: f64,
) -> Matrix4<f64> {
    // Accumulate e^(−2an)·{cos², cos·sin, sin²}·n^k, k = 0..2.
    let mut cc = [0.0f64; 3];
    let mut cs = [0.0f64; 3];
    let mut ss = [0.0f64; 3];
    let (step_c, step_s) = (omega_rad_per_sample.cos(), omega_rad_per_sample.sin());
    let (mut c, mut s) = (phase_rad.cos(), phase_rad.sin());
    let decay = (-decay_per_sample).exp();
    let mut env = 1.0f64;
    for i in 0..n {
        let t = i as f64;
        let (ec, es) = (env * c, env * s);
        let (pc, pcs, ps) = (ec * ec, ec * es, es * es);
        cc[0] += pc;
        cc[1] += t * pc;
        cc[2] += t * t * pc;
        cs[0] += pcs;
        cs[1] += t * pcs;
        cs[2] += t * t * pcs;
        ss[0] += ps;
        ss[1] += t * ps;
        ss[2] += t * t * ps;
        // Exact recurrence would drift over 10⁵ steps; renormalise the
        // rotation every 1024 samples from the closed form.
        let nc = c * step_c - s * step_s;
        let ns = s * step_c + c * step_s;
        c = nc;
        s = ns;
        env *= decay;
        if i % 1024 == 1023 {
            let psi = omega_rad_per_sample * (t + 1.0) + phase_rad;
            c = psi.cos();
            s = psi.sin();
            env = (-decay_per_sample * (t + 1.0)).exp();
        }
    }
    let a = amplitude;
    // Order (A, a, ω, φ).
    let j = Matrix4::new(
        cc[0],
        -a * cc[1],
        -a * cs[1],
        -a * cs[0],
        -a * cc[1],
        a * a * cc[2],
        a * a * cs[2],
        a * a * cs[1],
        -a * cs[1],
        a * a * cs[2],
        a * a * ss[2],
        a * a * ss[1],
        -a * cs[0],
        a * a * cs[1],
        a * a * ss[1],
        a * a * ss[0],
    );
    j / noise_variance
}

/// Numerical CRLB (standard deviation, Hz) on the frequency of one real
/// damped sinusoid: the (ω, ω) element of the inverse of
/// [`fisher_matrix_real`], converted by fs/2π.
///
/// The FIM's entries span many orders of magnitude (sums of 1, n and n²),
/// so it is scaled to unit diagonal before the Cholesky inversion
/// (Jacobi scaling, which leaves the inverse exact: (DJD)⁻¹ = D⁻¹J⁻¹D⁻¹).
/// Returns infinity when the matrix is singular (no information).
pub fn crlb_frequency_numeric(
    amplitude: f64,
    decay_rate_per_s: f64,
    frequency_hz: f64,
    phase_rad: f64,
    sample_rate_hz: f64,
    n: usize,
    noise_variance: f64,
) -> f64 {
    let j = fisher_matrix_real(
        amplitude,
        decay_rate_per_s / sample_rate_hz,
        2.0 * PI * frequency_hz / sample_rate_hz,
        phase_rad,
        n,
        noise_variance,
    );
    let d = j
        .diagonal()
        .map(|v| if v > 0.0 { 1.0 / v.sqrt() } else { 0.0 });
    if d.iter().any(|&v| v == 0.0) {
        return f64::INFINITY;
    }
    let scaled = Matrix4::from_fn(|r, c| j[(r, c)] * d[r] * d[c]);
    match scaled.cholesky() {
        Some(ch) => {
            let inv = ch.inverse();
            let var_w = inv[(2, 2)] * d[2] * d[2];
            var_w.sqrt() * sample_rate_hz / (2.0 * PI)
        }
        None => f64::INFINITY,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Undamped limit, worked by hand. A = 1, σ² = 0.01 (η = A²/2σ² = 50),
    /// fs = 1000 Hz, N = 1000:
    /// var(ω) = 24σ²/(A²·N·(N²−1)) = 0.24/(1000·999 999)
    ///        = 0.24/999 999 000 = 2.400 002 4e−10 rad²,
    /// σ_ω = 1.549 194 1e−5 rad/sample,
    /// σ_f = σ_ω·fs/2π = 1.549 194 1e−5·159.154 943 = 2.465 619e−3 Hz.
    /// (Kay's 12/((2π)²ηN(N²−1))·fs² gives the same: 12/(39.478·50·
    /// 999 999 000)·10⁶ = 6.079 28e−6 Hz², whose root is 2.465 62e−3 Hz.)
    #[test]
    fn undamped_limit_matches_hand_value() {
        let hand = 2.465_619e-3;
        let closed = crlb_frequency_hz(1.0, 0.0, 1000.0, 1000, 0.01);
        // Seven digits were carried by hand.
        assert!((closed / hand - 1.0).abs() < 1e-6, "{closed}");
        // A vanishing decay tends to the same value (series branch).
        let tiny = crlb_frequency_hz(1.0, 1e-6, 1000.0, 1000, 0.01);
        assert!((tiny / hand - 1.0).abs() < 1e-6, "{tiny}");
        // The exact real-model FIM differs from the asymptotic bound by
        // terms of relative order 1/(N·sin ω); 0.5 % covers them at
        // f = 123.4 Hz, N = 1000.
        let num = crlb_frequency_numeric(1.0, 0.0, 123.4, 0.3, 1000.0, 1000, 0.01);
        assert!((num / hand - 1.0).abs() < 5e-3, "{num}");
        let num_tiny = crlb_frequency_numeric(1.0, 1e-6, 123.4, 0.3, 1000.0, 1000, 0.01);
        assert!((num_tiny / hand - 1.0).abs() < 5e-3, "{num_tiny}");
    }

    /// Damped limit of a record much longer than the decay, worked by
    /// hand. With N → ∞, S₀·V = z/(1 − z)³ ≈ 1/(2a)³ (a small), so
    /// var(Ω) = fs²·var(ω) = fs²·2σ²·(2a)³/A² = 16σ²α³/(A²·fs) in (rad/s)².
    /// A = 1, σ² = 1e−4, α = 10/s, fs = 48 000 Hz, N = 96 000 (2 s,
    /// e^(−2αT) = e^(−40)):
    /// var(Ω) = 16·1e−4·1000/48 000 = 1.6/48 000 = 3.333 333e−5,
    /// σ_Ω = 5.773 503e−3 rad/s, σ_f = σ_Ω/2π = 9.188 815e−4 Hz.
    #[test]
    fn long_damped_record_matches_hand_value() {
        let hand = 9.188_815e-4;
        let closed = crlb_frequency_hz(1.0, 10.0, 48_000.0, 96_000, 1e-4);
        // The hand form drops terms of relative order a = 2e−4 (z/(1−z)³
        // against 1/(2a)³); 1e−3 covers them.
        assert!((closed / hand - 1.0).abs() < 1e-3, "{closed}");
        let decay = crlb_decay_rate_per_s(1.0, 10.0, 48_000.0, 96_000, 1e-4);
        assert!((decay / (2.0 * PI * closed) - 1.0).abs() < 1e-12);
    }

    /// The closed-form sums against the obvious loops.
    #[test]
    fn closed_sums_match_direct_sums() {
        for &(a, n) in &[
            (1e-7f64, 5000usize),
            (1e-6, 5000),
            (2e-6, 5000),
            (1e-4, 20_000),
            (3e-3, 2000),
            (0.2, 50),
        ] {
            let z = (-2.0 * a).exp();
            let (mut s0, mut s1, mut s2) = (0.0f64, 0.0f64, 0.0f64);
            let mut w = 1.0;
            for i in 0..n {
                let t = i as f64;
                s0 += w;
                s1 += t * w;
                s2 += t * t * w;
                w *= z;
            }
            let v_direct = s2 / s0 - (s1 / s0).powi(2);
            let v = weighted_variance(a, n);
            // Direct sums of 10⁴ terms are good to ~1e−12 relative, the
            // mean-square subtraction loses a few digits more.
            assert!((weight_sum(a, n) / s0 - 1.0).abs() < 1e-9, "S0 a={a}");
            assert!((v / v_direct - 1.0).abs() < 1e-7, "V a={a} {v} {v_direct}");
        }
    }

    #[test]
    fn series_and_sinh_forms_join_smoothly() {
        let n = 10_000usize;
        let a0 = SERIES_BELOW_NA / n as f64;
        let below = weighted_variance(a0 * (1.0 - 1e-9), n);
        let above = weighted_variance(a0 * (1.0 + 1e-9), n);
        // Both forms are accurate to ~1e−8 at the join.
        assert!((below / above - 1.0).abs() < 1e-7, "{below} {above}");
    }

    /// Closed form against the exact real-model FIM for damped cases
    /// whose frequency is far from 0 and fs/2 (many line widths), where
    /// the double-frequency terms the closed form drops are negligible.
    #[test]
    fn closed_form_agrees_with_numeric_fisher_matrix() {
        for &(alpha, f, n, phase) in &[
            (23.0, 1234.5, 24_000usize, 0.7),
            (5.76, 180.3, 48_000, -1.2),
            (60.0, 3000.0, 9_600, 2.5),
        ] {
            let closed = crlb_frequency_hz(0.5, alpha, 48_000.0, n, 1e-6);
            let num = crlb_frequency_numeric(0.5, alpha, f, phase, 48_000.0, n, 1e-6);
            // "A few percent": the neglected terms are of order
            // α/(2πf) ≲ 2 % here.
            assert!(
                (num / closed - 1.0).abs() < 0.02,
                "α={alpha}: {num} vs {closed}"
            );
        }
    }

    #[test]
    fn no_information_gives_infinity() {
        assert!(crlb_frequency_hz(0.0, 1.0, 48_000.0, 1000, 1e-6).is_infinite());
        assert!(crlb_frequency_hz(1.0, 1.0, 48_000.0, 1, 1e-6).is_infinite());
        assert!(crlb_frequency_numeric(0.0, 1.0, 100.0, 0.0, 48_000.0, 1000, 1e-6).is_infinite());
    }
}
