//! Option values checked and converted from the command line's text: the
//! fit's options, the synthesis, the batch's refinement and the watch
//! mode's polling. Each error names the option and what it accepts.

use crate::app::cli::{InputArgs, PanelArgs};
use crate::base::error::{Result, TonusError};
use crate::base::units::{self, TensionUnit};
use crate::fitting::fit::FitModel;
use crate::fitting::measurement::FitOptions;
use crate::physics::membrane::Point;
use crate::physics::synth::{ExtraTone, SynthConfig};
use std::path::PathBuf;
use std::time::Duration;

/// Default poll interval of the watch mode, s.
pub const WATCH_INTERVAL_DEFAULT_S: f64 = 0.5;
/// Shortest poll interval allowed, s.
pub const WATCH_INTERVAL_MIN_S: f64 = 0.05;
/// Longest poll interval allowed, s.
pub const WATCH_INTERVAL_MAX_S: f64 = 10.0;

/// Which recordings of a batch get the damped-sinusoid refinement
/// ([`crate::signal::partials::refine`]) on top of the FFT peaks.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Refinement {
    /// Every recording: per-mode frequency uncertainties, Cramér–Rao
    /// bounds, decays with uncertainty and split pairs in every record
    /// (about twice the time per recording).
    Always,
    /// A recording is measured on its FFT peaks first, and measured again
    /// with the refinement when its decision is not settled: when moving
    /// the tension (or anisotropy) by [`NEAR_LIMIT_FIT_U`] times the
    /// fit's own standard uncertainty either way changes the decision, or
    /// it is not measured, or the specification limits the unevenness
    /// (which needs the split pairs only the refinement resolves). The
    /// refinement moves a tension by about one such uncertainty, so it
    /// cannot change the decision of a settled recording; each record says
    /// which method it carries.
    #[default]
    NearLimits,
    /// Never: FFT peaks only.
    Never,
}

impl Refinement {
    /// The name on the command line: `always`, `near-limits`, `never`.
    pub fn name(self) -> &'static str {
        match self {
            Refinement::Always => "always",
            Refinement::NearLimits => "near-limits",
            Refinement::Never => "never",
        }
    }

    /// Parses a name of [`Refinement::name`].
    pub fn from_name(name: &str) -> Option<Refinement> {
        [
            Refinement::Always,
            Refinement::NearLimits,
            Refinement::Never,
        ]
        .into_iter()
        .find(|r| r.name() == name)
    }
}

/// How the watch mode polls and when it stops.
#[derive(Debug, Clone)]
pub struct WatchOptions {
    /// The folder recordings land in.
    pub dir: PathBuf,
    /// Time between two listings.
    pub interval: Duration,
    /// Stop after this many recordings (None: no limit).
    pub limit: Option<usize>,
    /// Stop after this long (None: run until stopped).
    pub timeout: Option<Duration>,
}

/// Validated options of `fit`.
///
/// # Errors
/// An unknown model name, or two models asked at once.
pub fn fit_options(
    free_aspect: bool,
    model: Option<&str>,
    input: &InputArgs,
) -> Result<FitOptions> {
    let named = model.map(|m| (m, FitModel::from_name(m)));
    let model = match (free_aspect, named) {
        (true, None) | (false, Some((_, Some(FitModel::FreeAspect)))) => FitModel::FreeAspect,
        (true, Some((_, Some(FitModel::Biaxial)))) => {
            return Err(TonusError::Panel(
                "biaxial tension and a free aspect ratio cannot be fitted together: on a rectangle the tensions and the sides enter only as Tx/(σ·Lx²) and Ty/(σ·Ly²); measure the sides and fit --model biaxial, or assume isotropic tension and use --free-aspect".into(),
            ))
        }
        (false, None) => FitModel::Isotropic,
        (false, Some((_, Some(m)))) => m,
        (true, Some((m, Some(_)))) => {
            return Err(TonusError::Panel(format!(
                "--free-aspect and --model {m} cannot be combined; choose one"
            )))
        }
        (_, Some((other, None))) => {
            return Err(TonusError::BadQuantity {
                key: "--model".into(),
                value: other.into(),
                expected: "isotropic, free-aspect, biaxial, stiff or air".into(),
                example: "air".into(),
            })
        }
    };
    Ok(FitOptions {
        model,
        analysis: input.analysis()?,
        calibration: None,
        aspect_search: true,
    })
}

/// Validated options of `calibrate`: the labelling model (isotropic or
/// air), the known tension and its standard uncertainty in N/m.
///
/// # Errors
/// Another model, malformed or impossible tensions.
pub fn calibrate_options(
    model: Option<&str>,
    tension: &str,
    tension_u: &str,
    input: &InputArgs,
) -> Result<(FitOptions, f64, f64)> {
    let opts = fit_options(false, model, input)?;
    if !matches!(opts.model, FitModel::Isotropic | FitModel::AirLoaded) {
        return Err(TonusError::Panel(
            "calibrate labels the references with --model isotropic or air; the factors are always against the ideal membrane".into(),
        ));
    }
    let t = units::parse_tension("--tension", tension)?.0;
    let u = units::parse_tension("--tension-u", tension_u)?.0;
    Ok((opts, t, u))
}

/// Reads a calibration file for `fit --calibration`.
///
/// # Errors
/// Unreadable or invalid file.
pub fn load_calibration(path: &std::path::Path) -> Result<crate::fitting::calibration::Loaded> {
    Ok(crate::fitting::calibration::Loaded {
        path: path.to_path_buf(),
        calibration: crate::fitting::calibration::Calibration::from_file(path)?,
    })
}

/// Parses a tension unit flag.
pub fn tension_unit(text: &str) -> Result<TensionUnit> {
    TensionUnit::parse("--tension-unit", text)
}

/// Validated options of `synth`, from its flags.
#[allow(clippy::too_many_arguments)]
pub fn synth_config(
    panel: &PanelArgs,
    tension: &str,
    snr: f64,
    t60: Option<&str>,
    tap_duration: Option<&str>,
    length: Option<&str>,
    pre_roll: Option<&str>,
    rate: u32,
    hum: Option<&str>,
    hum_level: f64,
    extra: &[String],
    taps: usize,
    tap_interval: Option<&str>,
    gain: f64,
    seed: u64,
    air: bool,
    tension_y: Option<&str>,
    bending_stiffness: Option<f64>,
    tension_skew: Option<&str>,
) -> Result<SynthConfig> {
    let p = panel.to_panel()?;
    let density = p.areal_density.ok_or_else(|| {
        TonusError::Panel("synth needs --areal-density (or --thickness with --density)".into())
    })?;
    let tension = units::parse_tension("--tension", tension)?;
    let tap = p.tap.unwrap_or(match p.shape {
        crate::physics::membrane::Shape::Rectangle { .. } => Point {
            u: 0.31,
            v: Some(0.27),
        },
        crate::physics::membrane::Shape::Circle { .. } => Point {
            u: 0.6,
            v: Some(0.0),
        },
    });
    let mut cfg = SynthConfig::new(p.shape, density, tension, tap);
    cfg.pickup = p.pickup;
    cfg.snr_db = snr;
    if !(-20.0..=140.0).contains(&snr) {
        return Err(TonusError::OutOfRange {
            key: "--snr".into(),
            value: snr.to_string(),
            why: "choose -20 to 140 dB".into(),
        });
    }
    if let Some(t) = t60 {
        cfg.t60_s = units::parse_duration_s("--t60", t)?;
    }
    if let Some(t) = tap_duration {
        cfg.tap_duration_s = units::parse_duration_s("--tap-duration", t)?;
    }
    if let Some(t) = length {
        cfg.duration_s = units::parse_duration_s("--length", t)?;
    }
    if let Some(t) = pre_roll {
        cfg.pre_roll_s = units::parse_duration_s("--pre-roll", t)?;
    }
    if let Some(t) = tap_interval {
        cfg.tap_interval_s = units::parse_duration_s("--tap-interval", t)?;
    }
    cfg.sample_rate_hz = rate;
    if let Some(h) = hum {
        cfg.hum = Some((units::parse_frequency("--hum", h)?.0, hum_level));
    }
    for e in extra {
        let parts: Vec<&str> = e.split(':').collect();
        let bad = || TonusError::BadQuantity {
            key: "--extra-tone".into(),
            value: e.clone(),
            expected: "FREQ:LEVEL_DB[:T60]".into(),
            example: "333Hz:-20:0.3s".into(),
        };
        if parts.len() < 2 || parts.len() > 3 {
            return Err(bad());
        }
        let f = units::parse_frequency("--extra-tone", parts[0])?.0;
        let level: f64 = parts[1].trim_end_matches("dB").parse().map_err(|_| bad())?;
        let t60 = match parts.get(2) {
            Some(t) => units::parse_duration_s("--extra-tone", t)?,
            None => f64::INFINITY,
        };
        cfg.extra_tones.push(ExtraTone {
            frequency_hz: f,
            level_db: level,
            t60_s: t60,
        });
    }
    cfg.taps = taps.max(1);
    cfg.gain_db = gain;
    cfg.seed = seed;
    cfg.air_loaded = air;
    if let Some(d) = bending_stiffness {
        if !(d > 0.0 && d.is_finite()) {
            return Err(TonusError::OutOfRange {
                key: "--bending-stiffness".into(),
                value: d.to_string(),
                why: "it must be a positive number of N·m".into(),
            });
        }
    }
    cfg.bending_stiffness = bending_stiffness;
    cfg.tension_skew = tension_skew.map(parse_skew).transpose()?;
    if cfg.tension_skew.is_some()
        && !matches!(p.shape, crate::physics::membrane::Shape::Circle { .. })
    {
        return Err(TonusError::Panel(
            "--tension-skew is for a circle; for a rectangle give --tension-y".into(),
        ));
    }
    cfg.tension_y = tension_y
        .map(|t| units::parse_tension("--tension-y", t))
        .transpose()?;
    Ok(cfg)
}

/// Parses `--tension-skew`: a fraction (0.02) or a percentage (2%),
/// |ε| < 0.5.
fn parse_skew(text: &str) -> Result<f64> {
    let t = text.trim();
    let (num, scale) = match t.strip_suffix('%') {
        Some(n) => (n.trim(), 0.01),
        None => (t, 1.0),
    };
    let v = num.parse::<f64>().map_err(|_| TonusError::BadQuantity {
        key: "--tension-skew".into(),
        value: text.into(),
        expected: "a fraction or a percentage".into(),
        example: "0.02 or 2%".into(),
    })? * scale;
    if !(v.is_finite() && v.abs() < 0.5) {
        return Err(TonusError::OutOfRange {
            key: "--tension-skew".into(),
            value: text.into(),
            why: "ε must lie between −0.5 and 0.5 (−50 % to 50 %)".into(),
        });
    }
    Ok(v)
}

/// The batch's [`Refinement`] from `--refine` (checked by
/// clap against its three names) and `--peaks-only` (which clap keeps
/// from being given with `--refine`).
///
/// # Errors
/// A `--refine` value that is not a refinement name.
pub fn refinement(refine: &str, peaks_only: bool) -> Result<Refinement> {
    if peaks_only {
        return Ok(Refinement::Never);
    }
    Refinement::from_name(refine).ok_or_else(|| TonusError::BadQuantity {
        key: "--refine".into(),
        value: refine.into(),
        expected: "when to refine".into(),
        example: "always, near-limits or never".into(),
    })
}

/// The watch mode's options from its flags; the interval defaults to
/// [`WATCH_INTERVAL_DEFAULT_S`] and must lie between
/// [`WATCH_INTERVAL_MIN_S`] and
/// [`WATCH_INTERVAL_MAX_S`].
///
/// # Errors
/// A duration without its unit, an interval out of range, a limit of 0.
pub fn watch_options(
    dir: PathBuf,
    interval: Option<&str>,
    limit: Option<usize>,
    timeout: Option<&str>,
) -> Result<WatchOptions> {
    let interval_s = match interval {
        Some(t) => units::parse_duration_s("--watch-interval", t)?,
        None => WATCH_INTERVAL_DEFAULT_S,
    };
    if !(WATCH_INTERVAL_MIN_S..=WATCH_INTERVAL_MAX_S).contains(&interval_s) {
        return Err(TonusError::OutOfRange {
            key: "--watch-interval".into(),
            value: interval.unwrap_or_default().into(),
            why: format!(
                "poll between {} ms and {} s",
                WATCH_INTERVAL_MIN_S * 1e3,
                WATCH_INTERVAL_MAX_S
            ),
        });
    }
    if limit == Some(0) {
        return Err(TonusError::OutOfRange {
            key: "--watch-limit".into(),
            value: "0".into(),
            why: "give at least 1 recording, or leave the flag out to watch until stopped".into(),
        });
    }
    let timeout = timeout
        .map(|t| units::parse_duration_s("--watch-timeout", t))
        .transpose()?
        .map(std::time::Duration::from_secs_f64);
    Ok(WatchOptions {
        dir,
        interval: std::time::Duration::from_secs_f64(interval_s),
        limit,
        timeout,
    })
}

pub fn sample_format(text: &str) -> Result<(u16, bool)> {
    match text {
        "16" => Ok((16, false)),
        "24" => Ok((24, false)),
        "32f" | "f32" | "float" => Ok((32, true)),
        _ => Err(TonusError::BadQuantity {
            key: "--bits".into(),
            value: text.into(),
            expected: "16, 24 or 32f".into(),
            example: "24".into(),
        }),
    }
}
