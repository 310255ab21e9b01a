//! [`refine`]: the damped-sinusoid estimator on the chosen peaks, split
//! pairs, and merging a pair's members.

use crate::signal::recording::Recording;
use crate::signal::spectrum::Spectrum;
use realfft::RealFftPlanner;

use super::types::*;

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
pub(super) const DB_PER_NEPER: f64 = 20.0 / std::f64::consts::LN_10;

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
pub(super) fn apply_fit(
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
pub(super) fn noise_variance_at(spectrum: &Spectrum, f_hz: f64) -> f64 {
    let k = spectrum.bin_of(f_hz).min(spectrum.floor_power.len() - 1);
    spectrum.floor_power[k] / spectrum.window_sq_sum.max(1e-300)
}

/// Makes `p` the single damped component `c`: its frequency with
/// uncertainty and bound, decay, amplitude, method.
pub(super) fn take_component(p: &mut Partial, c: &crate::signal::estimator::DampedComponent) {
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
pub(super) fn set_pair(p: &mut Partial, a: PairMember, b: PairMember) {
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
pub(super) fn set_decay(p: &mut Partial, alpha: f64, alpha_u: f64) {
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
