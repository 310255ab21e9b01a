//! Modal synthesis of tap recordings, for tests and demonstrations.
//!
//! The recording is the sum of the membrane's modes, each a decaying sine
//! started by a finite tap pulse:
//!
//! x(t) = Σ_k A_k · e^(−t/τ_k) · sin(2π f_k t),  t ≥ t_tap,
//! A_k = Σ_(modes of line k) φ(tap)·φ(pickup) · |F(f_k)|,
//!
//! with φ the mode shape normalised to a peak of 1, τ_k the amplitude time
//! constant (T60 = 3·ln 10·τ), and F the spectrum of a half-sine force
//! pulse of duration d, |F(f)| ∝ |cos(π f d)| / |1 − (2 f d)²| (the modal
//! response to a force pulse is the product of the pulse spectrum and the
//! mode's impulse response; common practice in modal analysis). Equal
//! modal masses are assumed, exact for the rectangle, approximate for the
//! circle.
//!
//! Damping: T60(f) = T60₁ · √(f₁/f), with f₁ the fundamental — a smooth
//! rise of loss with frequency chosen for realism, not from a source.
//!
//! Uneven tension on a circle (`tension_skew` = ε, uniform biaxial stress
//! Txx = T(1 + ε), Tyy = T(1 − ε)): each (1, n) pair sounds as two
//! partials, the cos member (nodal line along y, moving along x) at
//! f₀·√(1 + ε/2) and the sin member at f₀·√(1 − ε/2) — the first-order
//! result of [`crate::physics::evenness`], checked against a finite-difference
//! eigen-solve in `tests/disk_evenness.rs` — with amplitudes
//! R(tap)R(pickup)·cos θ_tap·cos θ_pickup and ·sin θ_tap·sin θ_pickup
//! (an unknown pickup angle counts as 1 for both, an unknown tap angle as
//! 0°). `skew_angle_deg` = θ₀ turns the tighter axis: the upper member's
//! shape is then cos(θ − θ₀) and the angles above are measured from θ₀.
//! Pairs with m ≥ 2 have no first-order split under a uniform stress and
//! stay one partial, unless `pattern` holds the order p = 2m of a rim
//! tension pattern (see [`SynthConfig::pattern`]).
//!
//! A round of taps ([`synthesise_round`]): one tap per given angle, at
//! the tap point's radius, each synthesised alone and added at its onset
//! with a random strength (a hand does not tap twice alike), then scaled
//! and given noise and hum as a single tap is.
//!
//! Noise is white Gaussian from a fixed seed. The SNR is the RMS of the
//! noiseless tap over its first 100 ms against the noise RMS, in dB.

use crate::base::error::{Result, TonusError};
use crate::base::units::{KgPerM2, NewtonsPerMeter};
use crate::physics::membrane::{wave_speed, ModeLine, Point, Shape};
use std::f64::consts::PI;

/// Default tap pulse duration, s.
pub const DEFAULT_TAP_DURATION_S: f64 = 0.0005;
/// Default T60 of the fundamental, s.
pub const DEFAULT_T60_S: f64 = 0.8;
/// Default sample rate, Hz.
pub const DEFAULT_SAMPLE_RATE_HZ: u32 = 48_000;
/// Default length of the recording, s.
pub const DEFAULT_DURATION_S: f64 = 1.5;
/// Default silence before the first tap, s.
pub const DEFAULT_PRE_ROLL_S: f64 = 0.1;
/// Default SNR, dB.
pub const DEFAULT_SNR_DB: f64 = 40.0;
/// Peak level the recording is scaled to, full-scale units (−3 dBFS).
pub const PEAK_FS: f64 = 0.707_945_784_384_137_9;

/// An extra, non-membrane tone (frame rattle, a neighbour's machine).
#[derive(Debug, Clone, Copy)]
pub struct ExtraTone {
    /// Frequency, Hz.
    pub frequency_hz: f64,
    /// Amplitude relative to the strongest mode, dB.
    pub level_db: f64,
    /// T60, s (infinite for a steady tone).
    pub t60_s: f64,
}

/// Everything that defines a synthetic recording.
#[derive(Debug, Clone)]
pub struct SynthConfig {
    /// Membrane outline.
    pub shape: Shape,
    /// Areal density.
    pub areal_density: KgPerM2,
    /// Isotropic tension.
    pub tension: NewtonsPerMeter,
    /// Where the membrane is struck.
    pub tap: Point,
    /// Where the microphone listens (None: equal weight for every mode).
    pub pickup: Option<Point>,
    /// Tap pulse duration, s.
    pub tap_duration_s: f64,
    /// T60 of the fundamental, s.
    pub t60_s: f64,
    /// Sample rate, Hz.
    pub sample_rate_hz: u32,
    /// Recording length, s.
    pub duration_s: f64,
    /// Silence before the first tap, s.
    pub pre_roll_s: f64,
    /// Signal-to-noise ratio, dB.
    pub snr_db: f64,
    /// Mains hum: (mains frequency Hz, level dB re the tap RMS); three
    /// harmonics at 0, −6 and −10 dB relative.
    pub hum: Option<(f64, f64)>,
    /// Extra tones.
    pub extra_tones: Vec<ExtraTone>,
    /// Number of taps.
    pub taps: usize,
    /// Time between taps, s.
    pub tap_interval_s: f64,
    /// Gain after scaling to −3 dBFS, dB (positive values clip).
    pub gain_db: f64,
    /// Noise seed.
    pub seed: u64,
    /// Highest mode frequency synthesised, Hz.
    pub max_frequency_hz: f64,
    /// Lower every mode by the air-loading factor of [`crate::physics::airload`].
    pub air_loaded: bool,
    /// Tension along y when it differs from `tension` (taken along x);
    /// rectangle only.
    pub tension_y: Option<NewtonsPerMeter>,
    /// Bending stiffness D, N·m (rectangle: the simply supported
    /// prestressed plate of [`crate::physics::plate`]).
    pub bending_stiffness: Option<f64>,
    /// Uniform biaxial stress on a circle: Txx = T(1 + ε), Tyy = T(1 − ε)
    /// with this ε (x along θ = 0). Each (1, n) pair splits into its cos
    /// and sin members at f₀·√(1 ± ε/2) ([`crate::physics::evenness`]).
    pub tension_skew: Option<f64>,
    /// Direction θ₀ of the tighter principal axis of `tension_skew`,
    /// degrees from x (0 by default): the upper member of each (1, n)
    /// pair has the angular shape cos(θ − θ₀), the lower sin(θ − θ₀).
    pub skew_angle_deg: f64,
    /// Higher even orders of a rim tension pattern T(θ) = T(1 + Σ δ_p ·
    /// cos p(θ − θ_p)), as (p, δ_p, θ_p in degrees), p even and ≥ 4: the
    /// order-m = p/2 pairs split by Δf/f₀ = c(m,n)·δ_p with c the
    /// [`crate::physics::evenness::lug_split_coefficient`]; the member cos m(θ − θ_p)
    /// is the upper one when c > 0, the lower when c < 0.
    pub pattern: Vec<(u32, f64, f64)>,
}

impl SynthConfig {
    /// A configuration with the defaults above.
    pub fn new(shape: Shape, areal_density: KgPerM2, tension: NewtonsPerMeter, tap: Point) -> Self {
        SynthConfig {
            shape,
            areal_density,
            tension,
            tap,
            pickup: None,
            tap_duration_s: DEFAULT_TAP_DURATION_S,
            t60_s: DEFAULT_T60_S,
            sample_rate_hz: DEFAULT_SAMPLE_RATE_HZ,
            duration_s: DEFAULT_DURATION_S,
            pre_roll_s: DEFAULT_PRE_ROLL_S,
            snr_db: DEFAULT_SNR_DB,
            hum: None,
            extra_tones: Vec::new(),
            taps: 1,
            tap_interval_s: 0.6,
            gain_db: 0.0,
            seed: 1,
            max_frequency_hz: 6000.0,
            air_loaded: false,
            tension_y: None,
            bending_stiffness: None,
            tension_skew: None,
            skew_angle_deg: 0.0,
            pattern: Vec::new(),
        }
    }
}

/// A small deterministic generator (SplitMix64; G. Steele, D. Lea and
/// C. Flood, "Fast splittable pseudorandom number generators", OOPSLA
/// 2014) with Box–Muller normal deviates.
#[derive(Debug, Clone)]
pub struct Rng {
    state: u64,
    spare: Option<f64>,
}

impl Rng {
    /// A generator from a seed.
    pub fn new(seed: u64) -> Self {
        Rng {
            state: seed ^ 0x9E37_79B9_7F4A_7C15,
            spare: None,
        }
    }

    /// Uniform in [0, 1).
    pub fn uniform(&mut self) -> f64 {
        self.state = self.state.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.state;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^= z >> 31;
        (z >> 11) as f64 / (1u64 << 53) as f64
    }

    /// Standard normal.
    pub fn normal(&mut self) -> f64 {
        if let Some(s) = self.spare.take() {
            return s;
        }
        let u1 = self.uniform().max(1e-300);
        let u2 = self.uniform();
        let r = (-2.0 * u1.ln()).sqrt();
        self.spare = Some(r * (2.0 * PI * u2).sin());
        r * (2.0 * PI * u2).cos()
    }
}

/// Spectrum magnitude of a half-sine pulse of duration d at f, normalised
/// to 1 at f = 0: |cos(π f d)| / |1 − (2 f d)²| (the removable singularity
/// at 2fd = 1 has the value π/4).
pub fn half_sine_spectrum(f: f64, d: f64) -> f64 {
    let x = 2.0 * f * d;
    if (x - 1.0).abs() < 1e-9 {
        return PI / 4.0;
    }
    ((PI * f * d).cos() / (1.0 - x * x)).abs()
}

/// Synthesises the recording, returning samples in full-scale units.
///
/// # Errors
/// Impossible settings (non-positive duration, tap outside the membrane,
/// a sample rate outside 8–192 kHz).
pub fn synthesise(cfg: &SynthConfig) -> Result<Vec<f64>> {
    check_config(cfg)?;
    let sr = cfg.sample_rate_hz as f64;
    let n = (cfg.duration_s * sr).round() as usize;
    let mut comps = components(cfg);
    extra_tones(cfg, &mut comps);
    let onsets: Vec<usize> = (0..cfg.taps.max(1))
        .map(|i| ((cfg.pre_roll_s + i as f64 * cfg.tap_interval_s) * sr).round() as usize)
        .filter(|&o| o < n)
        .collect();
    let mut x = vec![0.0; n];
    for &o in &onsets {
        render(&mut x[o..], &comps, sr);
    }
    // Scale the tap to −3 dBFS, then add noise and hum relative to it.
    let peak = x.iter().fold(0.0f64, |m, v| m.max(v.abs()));
    if peak <= 0.0 {
        return Err(TonusError::OutOfRange {
            key: "--tap-at".into(),
            value: format!("{:?}", cfg.tap),
            why: "no mode is excited there (a corner or edge); tap inside the membrane".into(),
        });
    }
    for v in x.iter_mut() {
        *v *= PEAK_FS / peak;
    }
    add_noise_and_hum(&mut x, onsets[0], cfg);
    Ok(x)
}

/// Refuses a sample rate, length or tap point out of range.
fn check_config(cfg: &SynthConfig) -> Result<()> {
    let bad = |key: &str, value: String, why: &str| TonusError::OutOfRange {
        key: key.into(),
        value,
        why: why.into(),
    };
    if !(8000..=192_000).contains(&cfg.sample_rate_hz) {
        return Err(bad(
            "--rate",
            cfg.sample_rate_hz.to_string(),
            "choose 8000 to 192000 Hz",
        ));
    }
    if !(cfg.duration_s > 0.0 && cfg.duration_s <= 60.0) {
        return Err(bad(
            "--length",
            format!("{} s", cfg.duration_s),
            "choose 0 to 60 s",
        ));
    }
    if !(0.0..=1.0).contains(&cfg.tap.u)
        || cfg.tap.v.is_some_and(|v| {
            matches!(cfg.shape, Shape::Rectangle { .. }) && !(0.0..=1.0).contains(&v)
        })
    {
        return Err(bad(
            "--tap-at",
            format!("{:?}", cfg.tap),
            "coordinates are fractions 0..1 of the size",
        ));
    }
    Ok(())
}

/// A decaying component: (frequency Hz, amplitude, amplitude decay rate 1/τ).
type Component = (f64, f64, f64);

/// The membrane's components: every mode line up to the highest frequency,
/// at its frequency under the configured physics (split pairs of a skewed
/// circle, biaxial rectangle, plate, air loading) and with its coupling at
/// the tap and pickup points.
fn components(cfg: &SynthConfig) -> Vec<Component> {
    let sr = cfg.sample_rate_hz as f64;
    let c = wave_speed(cfg.tension, cfg.areal_density).0;
    let fmax = cfg.max_frequency_hz.min(0.45 * sr);
    let lines = cfg.shape.lines(fmax / c, None, None);
    let f1 = cfg.shape.fundamental_factor() * c;
    let mut comps: Vec<Component> = Vec::new();
    for line in &lines {
        if split_pair_components(cfg, line, c, f1, &mut comps) {
            continue;
        }
        if biaxial_components(cfg, line, f1, &mut comps) {
            continue;
        }
        let f = line_frequency(cfg, line, c);
        let a = line_coupling(cfg, line) * half_sine_spectrum(f, cfg.tap_duration_s);
        let t60 = cfg.t60_s * (f1 / f).sqrt();
        let rate = 3.0 * std::f64::consts::LN_10 / t60;
        if a.abs() > 1e-6 {
            comps.push((f, a, rate));
        }
    }
    comps
}

/// A circle's (m,n) pair split by an uneven tension: its two members at
/// their own frequencies and couplings. False when the line is not split.
fn split_pair_components(
    cfg: &SynthConfig,
    line: &ModeLine,
    c: f64,
    f1: f64,
    comps: &mut Vec<Component>,
) -> bool {
    if let Shape::Circle { .. } = cfg.shape {
        let (m, nn) = line.labels[0];
        let split = pair_split(cfg, m, nn);
        if let (Some((up, down, alpha)), 1) = (split, line.labels.len()) {
            let air = if cfg.air_loaded {
                crate::physics::airload::loading_factor(line.factor, cfg.areal_density.0)
            } else {
                1.0
            };
            let f0 = line.factor * c * air;
            let radial = |u: f64| cfg.shape.mode_shape(m, nn, Point { u, v: None });
            let r = radial(cfg.tap.u) * cfg.pickup.map(|p| radial(p.u)).unwrap_or(1.0);
            let mm = m as f64;
            let th_t = mm * (cfg.tap.v.unwrap_or(0.0).to_radians() - alpha);
            let (cp, sp) = match cfg.pickup.and_then(|p| p.v) {
                Some(deg) => (
                    (mm * (deg.to_radians() - alpha)).cos(),
                    (mm * (deg.to_radians() - alpha)).sin(),
                ),
                None => (1.0, 1.0),
            };
            for (f, amp) in [
                (f0 * up, r * th_t.cos() * cp),
                (f0 * down, r * th_t.sin() * sp),
            ] {
                let a = amp * half_sine_spectrum(f, cfg.tap_duration_s);
                let t60 = cfg.t60_s * (f1 / f).sqrt();
                if a.abs() > 1e-6 {
                    comps.push((f, a, 3.0 * std::f64::consts::LN_10 / t60));
                }
            }
            return true;
        }
    }
    false
}

/// Biaxial tension on a rectangle: every mode of the line at its own
/// frequency, f² = (Tx·(m/Lx)² + Ty·(n/Ly)²)/(4σ), with its own coupling
/// (on a square the (m,n)/(n,m) pair of a line splits). False when the
/// tension is not biaxial.
fn biaxial_components(
    cfg: &SynthConfig,
    line: &ModeLine,
    f1: f64,
    comps: &mut Vec<Component>,
) -> bool {
    if let (Some(ty), Shape::Rectangle { width, height }, None) =
        (cfg.tension_y, cfg.shape, cfg.bending_stiffness)
    {
        for &(m, n) in &line.labels {
            let f = ((cfg.tension.0 * (m as f64 / width.0).powi(2)
                + ty.0 * (n as f64 / height.0).powi(2))
                / (4.0 * cfg.areal_density.0))
                .sqrt();
            let coupling = cfg.shape.mode_shape(m, n, cfg.tap)
                * cfg
                    .pickup
                    .map(|p| cfg.shape.mode_shape(m, n, p))
                    .unwrap_or(1.0);
            let a = coupling * half_sine_spectrum(f, cfg.tap_duration_s);
            let t60 = cfg.t60_s * (f1 / f).sqrt();
            if a.abs() > 1e-6 {
                comps.push((f, a, 3.0 * std::f64::consts::LN_10 / t60));
            }
        }
        return true;
    }
    false
}

/// The frequency of an unsplit line: plate, air-loaded or ideal membrane.
fn line_frequency(cfg: &SynthConfig, line: &ModeLine, c: f64) -> f64 {
    match (cfg.tension_y, cfg.shape) {
        _ if cfg.bending_stiffness.is_some() && matches!(cfg.shape, Shape::Rectangle { .. }) => {
            let (Shape::Rectangle { width, height }, Some(d)) = (cfg.shape, cfg.bending_stiffness)
            else {
                unreachable!("checked by the guard")
            };
            let (m, n) = line.labels[0];
            let s = cfg.areal_density.0;
            crate::physics::plate::frequency_hz(
                cfg.tension.0 / s,
                d / s,
                crate::physics::plate::k_squared(width.0, height.0, m, n),
            )
        }
        _ if cfg.air_loaded => {
            line.factor
                * c
                * crate::physics::airload::loading_factor(line.factor, cfg.areal_density.0)
        }
        _ => line.factor * c,
    }
}

/// The coupling of an unsplit line at the tap and pickup points, summed
/// over its modes.
fn line_coupling(cfg: &SynthConfig, line: &ModeLine) -> f64 {
    let mut a = 0.0;
    for &(m, nn) in &line.labels {
        let pair = match cfg.shape {
            Shape::Circle { .. } if m > 0 => {
                // cos and sin members: φ_c(t)φ_c(p) + φ_s(t)φ_s(p) =
                // R(t)R(p)·cos(m(θt − θp)).
                let rt = cfg.shape.mode_shape(
                    m,
                    nn,
                    Point {
                        u: cfg.tap.u,
                        v: None,
                    },
                );
                let rp = cfg
                    .pickup
                    .map(|p| cfg.shape.mode_shape(m, nn, Point { u: p.u, v: None }))
                    .unwrap_or(1.0);
                let ang = match (cfg.tap.v, cfg.pickup.and_then(|p| p.v)) {
                    (Some(a), Some(b)) => (m as f64 * (a - b).to_radians()).cos(),
                    _ => 1.0,
                };
                rt * rp * ang
            }
            _ => {
                let t = cfg.shape.mode_shape(m, nn, cfg.tap);
                let p = cfg
                    .pickup
                    .map(|p| cfg.shape.mode_shape(m, nn, p))
                    .unwrap_or(1.0);
                t * p
            }
        };
        a += pair;
    }
    a
}

/// Extra steady or decaying tones, levels relative to the strongest mode.
fn extra_tones(cfg: &SynthConfig, comps: &mut Vec<Component>) {
    let strongest = comps.iter().fold(0.0f64, |m, c| m.max(c.1.abs()));
    for t in &cfg.extra_tones {
        let rate = if t.t60_s.is_finite() && t.t60_s > 0.0 {
            3.0 * std::f64::consts::LN_10 / t.t60_s
        } else {
            0.0
        };
        comps.push((
            t.frequency_hz,
            strongest * 10f64.powf(t.level_db / 20.0),
            rate,
        ));
    }
}

/// Adds every component from the start of `x` (one tap), each by a
/// rotating phasor: one complex multiply per sample instead of an exp and
/// a sin.
fn render(x: &mut [f64], comps: &[Component], sr: f64) {
    for &(f, a, rate) in comps {
        let step = num_complex_step(f, rate, sr);
        // Start in sine phase: the value is the imaginary part of
        // a·e^{(−rate + iω)t}.
        let (mut pr, mut pi) = (a, 0.0f64);
        for v in x.iter_mut() {
            *v += pi;
            let nr = pr * step.0 - pi * step.1;
            let ni = pr * step.1 + pi * step.0;
            pr = nr;
            pi = ni;
            if pr.abs() + pi.abs() < 1e-9 * a.abs() {
                break;
            }
        }
    }
}

/// A round of taps: one tap at each of `angles_deg` (degrees, the tap
/// point's radius `cfg.tap.u`), `cfg.tap_interval_s` apart after
/// `cfg.pre_roll_s`, each with a strength drawn uniformly within
/// ±`force_spread_db` dB (seeded from `cfg.seed`). Noise, hum and gain
/// are applied to the sum as [`synthesise`] applies them to one tap, the
/// SNR taken against the first tap.
///
/// # Errors
/// As [`synthesise`]; no angle, or taps that do not fit in the length.
pub fn synthesise_round(
    cfg: &SynthConfig,
    angles_deg: &[f64],
    force_spread_db: f64,
) -> Result<Vec<f64>> {
    let sr = cfg.sample_rate_hz as f64;
    let n = (cfg.duration_s * sr).round() as usize;
    let onsets: Vec<usize> = (0..angles_deg.len())
        .map(|i| ((cfg.pre_roll_s + i as f64 * cfg.tap_interval_s) * sr).round() as usize)
        .collect();
    if angles_deg.is_empty() || onsets.last().is_some_and(|&o| o + (0.1 * sr) as usize >= n) {
        return Err(TonusError::OutOfRange {
            key: "--tap-angles".into(),
            value: format!("{} taps {} s apart", angles_deg.len(), cfg.tap_interval_s),
            why: format!(
                "give at least one angle, and a --length that holds every tap (here more than {:.2} s)",
                cfg.pre_roll_s + angles_deg.len() as f64 * cfg.tap_interval_s
            ),
        });
    }
    let mut rng = Rng::new(cfg.seed.wrapping_add(0x5EED));
    let mut x = vec![0.0; n];
    for (&angle, &o) in angles_deg.iter().zip(&onsets) {
        let mut one = cfg.clone();
        one.tap.v = Some(angle);
        one.taps = 1;
        one.pre_roll_s = 0.0;
        one.duration_s = (n - o) as f64 / sr;
        one.snr_db = 140.0;
        one.hum = None;
        one.gain_db = 0.0;
        let gain = 10f64.powf(force_spread_db * (2.0 * rng.uniform() - 1.0) / 20.0);
        for (v, s) in x[o..].iter_mut().zip(synthesise(&one)?) {
            *v += gain * s;
        }
    }
    let peak = x.iter().fold(0.0f64, |m, v| m.max(v.abs()));
    for v in x.iter_mut() {
        *v *= PEAK_FS / peak.max(1e-300);
    }
    add_noise_and_hum(&mut x, onsets[0], cfg);
    Ok(x)
}

/// A circle pair (m, n) split by the configured pattern: (upper/f₀,
/// lower/f₀, orientation α of the upper member's cos m(θ − α) shape in
/// radians), or None when the pair is not split.
fn pair_split(cfg: &SynthConfig, m: u32, nn: u32) -> Option<(f64, f64, f64)> {
    match (m, cfg.tension_skew) {
        (1, Some(eps)) => Some((
            (1.0 + eps / 2.0).sqrt(),
            (1.0 - eps / 2.0).sqrt(),
            cfg.skew_angle_deg.to_radians(),
        )),
        (0, _) | (1, None) => None,
        _ => cfg
            .pattern
            .iter()
            .find(|p| p.0 == 2 * m)
            .map(|&(_, d, th)| {
                let c = crate::physics::evenness::lug_split_coefficient(m, nn);
                let s = (c * d).abs();
                let quarter = if c >= 0.0 { 0.0 } else { 90.0 / m as f64 };
                (1.0 + s / 2.0, 1.0 - s / 2.0, (th + quarter).to_radians())
            }),
    }
}

/// Adds white noise at `cfg.snr_db` below the RMS of the first 100 ms
/// after the sample `onset`, the mains hum of `cfg.hum` (three harmonics
/// at 0, −6 and −10 dB) and the gain, and clips to full scale.
fn add_noise_and_hum(x: &mut [f64], onset: usize, cfg: &SynthConfig) {
    let sr = cfg.sample_rate_hz as f64;
    let (n, o) = (x.len(), onset);
    let win = ((0.1 * sr) as usize).min(n - o).max(1);
    let rms = (x[o..o + win].iter().map(|v| v * v).sum::<f64>() / win as f64).sqrt();
    let noise_rms = rms * 10f64.powf(-cfg.snr_db / 20.0);
    let mut rng = Rng::new(cfg.seed);
    let hum = cfg
        .hum
        .map(|(mains, level)| (mains, rms * 10f64.powf(level / 20.0)));
    let hum_phase = rng.uniform() * 2.0 * PI;
    let gain = 10f64.powf(cfg.gain_db / 20.0);
    for (i, v) in x.iter_mut().enumerate() {
        let mut s = *v + noise_rms * rng.normal();
        if let Some((mains, a)) = hum {
            let t = i as f64 / sr;
            for (k, rel) in [(1.0, 1.0), (2.0, 0.5), (3.0, 0.316)] {
                s += a * rel * (2.0 * PI * mains * k * t + hum_phase * k).sin();
            }
        }
        *v = (s * gain).clamp(-1.0, 1.0);
    }
}

/// Per-sample rotation e^{(−rate + i·2πf)/sr} as (re, im).
fn num_complex_step(f: f64, rate: f64, sr: f64) -> (f64, f64) {
    let mag = (-rate / sr).exp();
    let w = 2.0 * PI * f / sr;
    (mag * w.cos(), mag * w.sin())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::base::units::Meters;

    #[test]
    fn pulse_spectrum_has_its_first_zero_at_three_halves_over_d() {
        let d = 1e-3;
        assert!((half_sine_spectrum(0.0, d) - 1.0).abs() < 1e-12);
        assert!(half_sine_spectrum(1500.0, d) < 1e-9);
        assert!((half_sine_spectrum(500.0, d) - PI / 4.0).abs() < 1e-6);
    }

    #[test]
    fn synthesis_is_deterministic_and_scaled() {
        let cfg = SynthConfig::new(
            Shape::Rectangle {
                width: Meters(0.4),
                height: Meters(0.3),
            },
            KgPerM2(0.26),
            NewtonsPerMeter(2500.0),
            Point {
                u: 0.31,
                v: Some(0.27),
            },
        );
        let a = synthesise(&cfg).unwrap();
        let b = synthesise(&cfg).unwrap();
        assert_eq!(a, b);
        let peak = a.iter().fold(0.0f64, |m, v| m.max(v.abs()));
        // −3 dBFS plus at most a little noise at 40 dB SNR.
        assert!(peak > 0.69 && peak < 0.73, "{peak}");
    }
}
