//! Command-line interface: clap definitions and their conversion into the
//! library's validated option values. Nothing here computes a number.

use crate::base::error::{Result, TonusError};
use crate::base::units::{self, TensionUnit};
use crate::fitting::fit::FitModel;
use crate::fitting::pipeline::FitOptions;
use crate::physics::membrane::Point;
use crate::physics::panel::{Panel, PanelSpec};
use crate::physics::synth::{self, ExtraTone, SynthConfig};
use crate::signal::partials::AnalysisConfig;
use crate::signal::recording::ChannelChoice;
use clap::{Args, Parser, Subcommand};
use std::path::PathBuf;

/// Membrane tension from the tap tone.
#[derive(Debug, Parser)]
#[command(name = "tonus", version, about, long_about = None)]
pub struct Cli {
    /// What to do.
    #[command(subcommand)]
    pub command: Command,
}

/// Subcommands.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// List the partials of a tap recording (frequency, level, SNR, decay).
    Partials {
        /// The recording (WAV, FLAC or AIFF).
        recording: PathBuf,
        #[command(flatten)]
        input: InputArgs,
        /// Print one JSON object instead of the table.
        #[arg(long)]
        json: bool,
    },
    /// Fit the tension of a membrane to a tap recording.
    Fit {
        /// The recording (WAV, FLAC or AIFF).
        recording: PathBuf,
        #[command(flatten)]
        panel: PanelArgs,
        #[command(flatten)]
        input: InputArgs,
        /// Also fit the rectangle's effective height (width as given).
        #[arg(long)]
        free_aspect: bool,
        /// Model: isotropic (default), free-aspect, biaxial (rectangle, Tx and Ty), stiff (rectangle: tension and bending stiffness), air (air-loaded membrane).
        #[arg(long)]
        model: Option<String>,
        /// Unit for the printed tension: N/m, N/cm, kN/m, lbf/in.
        #[arg(long, default_value = "N/m")]
        tension_unit: String,
        /// Print one JSON object instead of the table.
        #[arg(long)]
        json: bool,
        /// Write report, JSON, CSV and spectrum PNG into this folder.
        #[arg(long)]
        out: Option<PathBuf>,
        /// With --out, skip the PNG.
        #[arg(long)]
        no_picture: bool,
        /// Calibration file from `tonus calibrate`: fit against the calibrated mode lines (isotropic model only).
        #[arg(long)]
        calibration: Option<PathBuf>,
    },
    /// Per-mode correction factors from reference recordings at a known tension.
    Calibrate {
        /// Reference recordings (WAV, FLAC or AIFF) of one membrane at the known tension.
        #[arg(required = true)]
        recordings: Vec<PathBuf>,
        #[command(flatten)]
        panel: PanelArgs,
        #[command(flatten)]
        input: InputArgs,
        /// The known tension, e.g. 3000N/m or 30N/cm.
        #[arg(long)]
        tension: String,
        /// Its standard uncertainty (k = 1), e.g. 30N/m.
        #[arg(long)]
        tension_u: String,
        /// Model used to label the references: isotropic (default) or air (light film in air).
        #[arg(long)]
        model: Option<String>,
        /// Calibration file to write (TOML).
        #[arg(long)]
        out: PathBuf,
    },
    /// Predicted mode table for a tension, or the tension for a fundamental.
    Modes {
        #[command(flatten)]
        panel: PanelArgs,
        /// Tension, e.g. 2500N/m or 25N/cm.
        #[arg(long, conflicts_with = "fundamental")]
        tension: Option<String>,
        /// Target fundamental, e.g. 180Hz: prints the tension that gives it.
        #[arg(long)]
        fundamental: Option<String>,
        /// Number of lines to list [default: 12].
        #[arg(long, default_value_t = 12)]
        count: usize,
        /// Unit for tensions: N/m, N/cm, kN/m, lbf/in.
        #[arg(long, default_value = "N/m")]
        tension_unit: String,
        /// Print JSON.
        #[arg(long)]
        json: bool,
    },
    /// Make a tap recording by modal synthesis.
    Synth {
        #[command(flatten)]
        panel: PanelArgs,
        /// Tension, e.g. 2500N/m.
        #[arg(long)]
        tension: String,
        /// Output WAV file.
        #[arg(short = 'o', long = "output")]
        output: PathBuf,
        /// Signal-to-noise ratio in dB [default: 40].
        #[arg(long, default_value_t = synth::DEFAULT_SNR_DB)]
        snr: f64,
        /// T60 of the fundamental, e.g. 0.8s [default: 0.8s].
        #[arg(long)]
        t60: Option<String>,
        /// Tap pulse duration, e.g. 0.5ms [default: 0.5ms].
        #[arg(long)]
        tap_duration: Option<String>,
        /// Recording length, e.g. 1.5s [default: 1.5s].
        #[arg(long)]
        length: Option<String>,
        /// Silence before the first tap, e.g. 100ms [default: 100ms].
        #[arg(long)]
        pre_roll: Option<String>,
        /// Sample rate in Hz [default: 48000].
        #[arg(long, default_value_t = synth::DEFAULT_SAMPLE_RATE_HZ)]
        rate: u32,
        /// Sample format: 16, 24 or 32f [default: 16].
        #[arg(long, default_value = "16")]
        bits: String,
        /// Mains hum: 50Hz or 60Hz.
        #[arg(long)]
        hum: Option<String>,
        /// Hum level in dB relative to the tap [default: -20].
        #[arg(long, default_value_t = -20.0, allow_hyphen_values = true)]
        hum_level: f64,
        /// Extra tone FREQ:LEVEL or FREQ:LEVEL:T60, e.g. 333Hz:-20:0.3s (level in dB re the strongest mode); repeatable.
        #[arg(long = "extra-tone")]
        extra_tone: Vec<String>,
        /// Number of taps [default: 1].
        #[arg(long, default_value_t = 1)]
        taps: usize,
        /// Time between taps, e.g. 0.6s [default: 0.6s].
        #[arg(long)]
        tap_interval: Option<String>,
        /// Gain in dB after scaling to -3 dBFS (positive values clip) [default: 0].
        #[arg(long, default_value_t = 0.0, allow_hyphen_values = true)]
        gain: f64,
        /// Noise seed [default: 1].
        #[arg(long, default_value_t = 1)]
        seed: u64,
        /// Lower the modes by air loading (a light film in air).
        #[arg(long)]
        air: bool,
        /// Tension along y (rectangle; --tension is then along x).
        #[arg(long)]
        tension_y: Option<String>,
        /// Bending stiffness D in N·m (rectangle, simply supported plate), e.g. 0.02.
        #[arg(long)]
        bending_stiffness: Option<f64>,
        /// Uneven tension on a circle: Txx = T(1+ε), Tyy = T(1−ε), ε as a fraction or percent, e.g. 0.02 or 2% (splits each (1,n) pair; tap off the axes, e.g. --tap-at 0.6,30, to hear both members).
        #[arg(long)]
        tension_skew: Option<String>,
        #[command(flatten)]
        round: Box<RoundSynthArgs>,
    },
    /// A round of taps, one near each lug of a drum head: the tension
    /// pattern, each lug's deviation from the mean and which lugs to turn
    /// (from recordings, or live from standard input: "-").
    Round(Box<RoundArgs>),
    /// Decide recordings against a specification (pass / fail /
    /// indeterminate / not measured), in parallel, with a history record.
    Inspect {
        /// Specification file (TOML).
        #[arg(long)]
        spec: PathBuf,
        /// Recordings and folders of recordings.
        #[arg(required_unless_present = "watch", conflicts_with = "watch")]
        inputs: Vec<PathBuf>,
        /// Station mode: decide each new recording (.wav, .flac, .aif, .aiff,
        /// .aifc) as it lands in this folder
        /// (files already there are left alone).
        #[arg(long, value_name = "DIR")]
        watch: Option<PathBuf>,
        /// Watch mode: time between two listings of the folder, 50ms to 10s
        /// [default: 500ms].
        #[arg(long, value_name = "DURATION", requires = "watch")]
        watch_interval: Option<String>,
        /// Watch mode: stop after this many recordings.
        #[arg(long, value_name = "N", requires = "watch")]
        watch_limit: Option<usize>,
        /// Watch mode: stop after this long, e.g. 60s or 28800s.
        #[arg(long, value_name = "DURATION", requires = "watch")]
        watch_timeout: Option<String>,
        /// Folder for inspect.csv, inspect.jsonl and the batch report [default: inspect-out].
        #[arg(long, default_value = "inspect-out")]
        out: PathBuf,
        /// History database [default: tonus-history.sqlite].
        #[arg(long, default_value = "tonus-history.sqlite")]
        history: PathBuf,
        /// Do not write the history.
        #[arg(long)]
        no_history: bool,
        /// Station name for the record.
        #[arg(long)]
        station: Option<String>,
        /// Operator name for the record.
        #[arg(long)]
        operator: Option<String>,
        /// Which recordings get the damped-sinusoid refinement: always,
        /// near-limits (those whose decision a shift of 10 fit
        /// uncertainties would change) or never [default: near-limits].
        #[arg(long, value_name = "WHEN", default_value = "near-limits", value_parser = ["always", "near-limits", "never"])]
        refine: String,
        /// FFT peaks only, the same as --refine never.
        #[arg(long, conflicts_with = "refine")]
        peaks_only: bool,
    },
    /// List or export the decision history.
    History {
        /// History database [default: tonus-history.sqlite].
        #[arg(long, default_value = "tonus-history.sqlite")]
        db: PathBuf,
        /// Only this specification (panel type) name.
        #[arg(long)]
        spec: Option<String>,
        /// From this time (RFC 3339, e.g. 2026-12-01T00:00:00Z).
        #[arg(long)]
        since: Option<String>,
        /// Before this time (RFC 3339).
        #[arg(long)]
        until: Option<String>,
        /// Only this decision: pass, fail, indeterminate, not_measured.
        #[arg(long)]
        decision: Option<String>,
        /// Export as CSV to this file instead of listing.
        #[arg(long)]
        csv: Option<PathBuf>,
    },
    /// Fit every recording in the demo folder and write the reports.
    Demo {
        /// Folder of recordings, each with a NAME.panel.toml beside it.
        #[arg(long, default_value = "demo-recordings")]
        recordings: PathBuf,
        /// Folder for the reports.
        #[arg(long, default_value = "reports")]
        out: PathBuf,
    },
}

/// Geometry and material flags shared by fit, modes and synth.
#[derive(Debug, Args, Clone, Default)]
pub struct PanelArgs {
    /// Panel file (TOML) with the same keys as these flags.
    #[arg(long)]
    pub panel: Option<PathBuf>,
    /// rect or circle.
    #[arg(long)]
    pub shape: Option<String>,
    /// Rectangle width (x), e.g. 400mm.
    #[arg(long)]
    pub width: Option<String>,
    /// Rectangle height (y), e.g. 300mm.
    #[arg(long)]
    pub height: Option<String>,
    /// Circle diameter, e.g. 14in.
    #[arg(long)]
    pub diameter: Option<String>,
    /// Circle radius, e.g. 178mm.
    #[arg(long)]
    pub radius: Option<String>,
    /// Areal density, e.g. 0.26kg/m2 or 260g/m2.
    #[arg(long)]
    pub areal_density: Option<String>,
    /// Film thickness (with --density), e.g. 0.19mm.
    #[arg(long)]
    pub thickness: Option<String>,
    /// Film density (with --thickness), e.g. 1390kg/m3.
    #[arg(long)]
    pub density: Option<String>,
    /// Tap point: x,y fractions (rectangle) or r or r,deg (circle).
    #[arg(long)]
    pub tap_at: Option<String>,
    /// Pickup (microphone) point, same form as --tap-at.
    #[arg(long)]
    pub pickup_at: Option<String>,
    /// Standard uncertainty of the areal density, e.g. 0.005kg/m2.
    #[arg(long)]
    pub areal_density_u: Option<String>,
    /// Standard uncertainty of each dimension, e.g. 0.5mm.
    #[arg(long)]
    pub size_u: Option<String>,
    /// Standard uncertainty of the thickness, e.g. 0.005mm (Young's modulus).
    #[arg(long)]
    pub thickness_u: Option<String>,
    /// Poisson's ratio ν, e.g. 0.38 (with --thickness: Young's modulus from D, --model stiff).
    #[arg(long)]
    pub poisson_ratio: Option<String>,
    /// Standard uncertainty of Poisson's ratio, e.g. 0.02.
    #[arg(long)]
    pub poisson_ratio_u: Option<String>,
}

/// Recording input flags.
#[derive(Debug, Args, Clone, Default)]
pub struct InputArgs {
    /// Channel to analyse, counted from 1 (default: mix all channels).
    #[arg(long)]
    pub channel: Option<usize>,
    /// Minimum SNR of a partial in dB [default: 10].
    #[arg(long)]
    pub min_snr: Option<f64>,
    /// Highest frequency searched, e.g. 5kHz [default: 95 % of Nyquist].
    #[arg(long)]
    pub max_frequency: Option<String>,
    /// FFT peaks only: skip the damped-sinusoid refinement (about half the
    /// time; no frequency uncertainties or split pairs).
    #[arg(long)]
    pub peaks_only: bool,
}

impl PanelArgs {
    /// The panel described by the flags over the panel file.
    ///
    /// # Errors
    /// Unreadable panel file, malformed or missing values.
    pub fn to_panel(&self) -> Result<Panel> {
        Panel::from_spec(&self.to_spec()?)
    }

    /// The merged specification (flags over the panel file).
    ///
    /// # Errors
    /// Unreadable or invalid panel file.
    pub fn to_spec(&self) -> Result<PanelSpec> {
        let flags = PanelSpec {
            shape: self.shape.clone(),
            width: self.width.clone(),
            height: self.height.clone(),
            diameter: self.diameter.clone(),
            radius: self.radius.clone(),
            areal_density: self.areal_density.clone(),
            thickness: self.thickness.clone(),
            density: self.density.clone(),
            tap_at: self.tap_at.clone(),
            pickup_at: self.pickup_at.clone(),
            areal_density_u: self.areal_density_u.clone(),
            size_u: self.size_u.clone(),
            model: None,
            thickness_u: self.thickness_u.clone(),
            poisson_ratio: self.poisson_ratio.clone(),
            poisson_ratio_u: self.poisson_ratio_u.clone(),
        };
        let base = match &self.panel {
            Some(p) => PanelSpec::from_file(p)?,
            None => PanelSpec::default(),
        };
        Ok(flags.over(base))
    }
}

impl InputArgs {
    /// The channel choice.
    ///
    /// # Errors
    /// Channel 0.
    pub fn channel(&self) -> Result<ChannelChoice> {
        match self.channel {
            None => Ok(ChannelChoice::MixDown),
            Some(0) => Err(TonusError::OutOfRange {
                key: "--channel".into(),
                value: "0".into(),
                why: "channels are counted from 1".into(),
            }),
            Some(n) => Ok(ChannelChoice::Index(n - 1)),
        }
    }

    /// The partial finder configuration.
    ///
    /// # Errors
    /// Malformed frequency or SNR.
    pub fn analysis(&self) -> Result<AnalysisConfig> {
        let mut cfg = AnalysisConfig {
            refine: !self.peaks_only,
            ..AnalysisConfig::default()
        };
        if let Some(s) = self.min_snr {
            if !(0.0..=100.0).contains(&s) {
                return Err(TonusError::OutOfRange {
                    key: "--min-snr".into(),
                    value: s.to_string(),
                    why: "choose 0 to 100 dB".into(),
                });
            }
            cfg.min_snr_db = s;
        }
        if let Some(f) = &self.max_frequency {
            cfg.max_frequency_hz = Some(units::parse_frequency("--max-frequency", f)?.0);
        }
        Ok(cfg)
    }
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

/// The batch's [`crate::app::batch::Refinement`] from `--refine` (checked by
/// clap against its three names) and `--peaks-only` (which clap keeps
/// from being given with `--refine`).
///
/// # Errors
/// A `--refine` value that is not a refinement name.
pub fn refinement(refine: &str, peaks_only: bool) -> Result<crate::app::batch::Refinement> {
    if peaks_only {
        return Ok(crate::app::batch::Refinement::Never);
    }
    crate::app::batch::Refinement::from_name(refine).ok_or_else(|| TonusError::BadQuantity {
        key: "--refine".into(),
        value: refine.into(),
        expected: "when to refine".into(),
        example: "always, near-limits or never".into(),
    })
}

/// The watch mode's options from its flags; the interval defaults to
/// [`crate::app::batch::WATCH_INTERVAL_DEFAULT_S`] and must lie between
/// [`crate::app::batch::WATCH_INTERVAL_MIN_S`] and
/// [`crate::app::batch::WATCH_INTERVAL_MAX_S`].
///
/// # Errors
/// A duration without its unit, an interval out of range, a limit of 0.
pub fn watch_options(
    dir: PathBuf,
    interval: Option<&str>,
    limit: Option<usize>,
    timeout: Option<&str>,
) -> Result<crate::app::batch::WatchOptions> {
    use crate::app::batch::{WATCH_INTERVAL_DEFAULT_S, WATCH_INTERVAL_MAX_S, WATCH_INTERVAL_MIN_S};
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
    Ok(crate::app::batch::WatchOptions {
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

/// The flags of `tonus round`.
#[derive(Debug, Args, Clone)]
pub struct RoundArgs {
    /// One recording of the whole round, one recording per lug in lug
    /// order, or "-" for a live stream on standard input (WAV header
    /// stream, or raw PCM with --pcm-rate).
    #[arg(required = true)]
    pub recordings: Vec<PathBuf>,
    #[command(flatten)]
    pub panel: PanelArgs,
    #[command(flatten)]
    pub input: InputArgs,
    /// Number of lugs, one tap near each, 3 to 64.
    #[arg(long)]
    pub lugs: usize,
    /// Angle of lug 1 in degrees, counter-clockwise from the head's 0°
    /// mark, seen from above [default: 0].
    #[arg(long, default_value_t = 0.0, allow_hyphen_values = true)]
    pub first_lug: f64,
    /// Which way the lugs are numbered, seen from above: cw or ccw
    /// [default: cw].
    #[arg(long, default_value = "cw")]
    pub direction: String,
    /// Largest deviation of a lug from the mean that is still even, e.g.
    /// 1% [default: 1%].
    #[arg(long, default_value = "1%")]
    pub tolerance: String,
    /// The maker's tension rating for the head (and hoop), e.g. 4000N/m:
    /// with the mean at or above it, no lug is advised to be tightened.
    #[arg(long)]
    pub rating: Option<String>,
    /// Model: isotropic (default) or air (air-loaded film).
    #[arg(long)]
    pub model: Option<String>,
    /// Print one JSON object per round instead of the text.
    #[arg(long)]
    pub json: bool,
    /// Write the round's report (Markdown, HTML, JSON, PNG) into this folder.
    #[arg(long)]
    pub out: Option<PathBuf>,
    /// Raw PCM on standard input: sample rate in Hz (with --pcm-format).
    #[arg(long)]
    pub pcm_rate: Option<u32>,
    /// Raw PCM: interleaved channels (mixed to one) [default: 1].
    #[arg(long, default_value_t = 1)]
    pub pcm_channels: u16,
    /// Raw PCM: sample format s16, s24, s32 or f32, little-endian [default: s16].
    #[arg(long, default_value = "s16")]
    pub pcm_format: String,
    /// Live stream: stop after this many finished rounds [default: until the stream ends].
    #[arg(long)]
    pub rounds: Option<usize>,
}

/// `tonus synth` flags for rounds of taps and tension patterns.
#[derive(Debug, Args, Clone, Default)]
pub struct RoundSynthArgs {
    /// Direction of the tighter axis of --tension-skew, degrees
    /// counter-clockwise from 0° [default: 0].
    #[arg(long, allow_hyphen_values = true)]
    pub skew_angle: Option<f64>,
    /// A higher even order of the rim tension pattern, ORDER:AMPLITUDE:ANGLE,
    /// e.g. 4:3%:10 (order 4, δ = 3 %, tightest at 10°): splits the
    /// (ORDER/2, n) pairs; repeatable.
    #[arg(long = "pattern-order")]
    pub pattern_order: Vec<String>,
    /// A round of taps: one tap at each of these angles (degrees, comma
    /// separated, at the --tap-at radius), --tap-interval apart.
    #[arg(long, value_delimiter = ',', allow_hyphen_values = true)]
    pub tap_angles: Vec<f64>,
    /// Round of taps: each tap's strength varies at random within ±this
    /// many dB [default: 0].
    #[arg(long, default_value_t = 0.0)]
    pub tap_spread: f64,
}
