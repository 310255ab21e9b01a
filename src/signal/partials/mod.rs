//! Partials: the peaks of the tap spectrum, with frequency, level, SNR and
//! decay, and the mains hum set aside.
//!
//! Conventions: spectra as in [`crate::signal::spectrum`] (one-sided, dB re a
//! full-scale sine). SNR is the peak power over the local noise-floor mean
//! power, in dB. Decay is measured on a short-time Fourier transform of the
//! span and given as a level decay rate in dB/s; T60 = 60 dB / rate, the
//! amplitude time constant τ = 20/(rate·ln 10) and Q = π·f·τ.

mod analyse;
mod peaks;
mod refine;
mod types;

pub use analyse::{analyse, analyse_with, STEADY_ABOVE_NOISE_DB, STEADY_LEVEL_DB};
pub use peaks::{false_alarm_snr_db, pick_peaks, FALSE_ALARM_PROBABILITY};
pub use refine::{
    merge_pair, refine, FIT_PENCIL_SAMPLES, REFINE_HALF_WIDTH_HZ, REFINE_MAX_ORDER,
    REFINE_MAX_SHIFT_BINS, REFINE_NEIGHBOUR_FRACTION,
};
pub use types::{
    AnalysisConfig, FrequencyMethod, HumLine, PairMember, Partial, PartialAnalysis, SplitPair,
    DEFAULT_MAX_PARTIALS, DEFAULT_MIN_FREQUENCY_HZ, DEFAULT_MIN_PROMINENCE_DB, DEFAULT_MIN_SNR_DB,
    DYNAMIC_RANGE_DB, HUM_MAX_HARMONIC, HUM_TOLERANCE_HZ, LOW_PARTIALS_KEPT, LOW_PARTIALS_RANGE_DB,
    SUSTAINED_DECAY_DB_PER_S,
};

#[cfg(test)]
mod tests {
    use super::analyse::*;
    use super::peaks::*;

    use super::*;
    use crate::signal::recording::Recording;
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
            // The refinement claims a standard uncertainty for each
            // frequency (its covariance at the solution, with the noise
            // measured before the tap); the error must lie within 3u of
            // it, and u must be what a damped-sinusoid fit gives at this
            // SNR (far below the 0.1 Hz an FFT peak would be held to).
            let u = p.frequency_u_hz.expect("default analysis refines");
            assert!(
                (p.frequency_hz - f).abs() <= 3.0 * u,
                "{} vs {} (u = {u})",
                p.frequency_hz,
                f
            );
            assert!(u > 0.0 && u < 0.005, "u = {u} Hz at {f} Hz");
            // 10 % on T60 allows for the frame-level fit near the noise.
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
