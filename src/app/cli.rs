//! Command-line interface: the clap definitions and the small conversions
//! of their own groups of arguments (panel, input). The option values of
//! the commands are checked in [`crate::app::options`]. Nothing here
//! computes a number.

use crate::base::error::{Result, TonusError};
use crate::base::units;
use crate::physics::panel::{Panel, PanelSpec};
use crate::physics::synth;
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
    Partials(PartialsArgs),
    /// Fit the tension of a membrane to a tap recording.
    Fit(FitArgs),
    /// Per-mode correction factors from reference recordings at a known tension.
    Calibrate(CalibrateArgs),
    /// Predicted mode table for a tension, or the tension for a fundamental.
    Modes(ModesArgs),
    /// Make a tap recording by modal synthesis.
    Synth(SynthArgs),
    /// Decide recordings against a specification (pass / fail /
    /// indeterminate / not measured), in parallel, with a history record.
    Inspect(InspectArgs),
    /// List or export the decision history.
    History(HistoryArgs),
    /// Fit every recording in the demo folder and write the reports.
    Demo(DemoArgs),
    /// A round of taps, one near each lug of a drum head: the tension
    /// pattern, each lug's deviation from the mean and which lugs to turn
    /// (from recordings, or live from standard input: "-").
    Round(RoundArgs),
}

/// Arguments of `tonus partials`.
#[derive(Debug, Args)]
pub struct PartialsArgs {
    /// The recording (WAV, FLAC or AIFF).
    pub recording: PathBuf,
    #[command(flatten)]
    pub input: InputArgs,
    /// Print one JSON object instead of the table.
    #[arg(long)]
    pub json: bool,
}

/// Arguments of `tonus fit`.
#[derive(Debug, Args)]
pub struct FitArgs {
    /// The recording (WAV, FLAC or AIFF).
    pub recording: PathBuf,
    #[command(flatten)]
    pub panel: PanelArgs,
    #[command(flatten)]
    pub input: InputArgs,
    /// Also fit the rectangle's effective height (width as given).
    #[arg(long)]
    pub free_aspect: bool,
    /// Model: isotropic (default), free-aspect, biaxial (rectangle, Tx and Ty), stiff (rectangle: tension and bending stiffness), air (air-loaded membrane).
    #[arg(long)]
    pub model: Option<String>,
    /// Unit for the printed tension: N/m, N/cm, kN/m, lbf/in.
    #[arg(long, default_value = "N/m")]
    pub tension_unit: String,
    /// Print one JSON object instead of the table.
    #[arg(long)]
    pub json: bool,
    /// Write report, JSON, CSV and spectrum PNG into this folder.
    #[arg(long)]
    pub out: Option<PathBuf>,
    /// With --out, skip the PNG.
    #[arg(long)]
    pub no_picture: bool,
    /// Calibration file from `tonus calibrate`: fit against the calibrated mode lines (isotropic model only).
    #[arg(long)]
    pub calibration: Option<PathBuf>,
}

/// Arguments of `tonus calibrate`.
#[derive(Debug, Args)]
pub struct CalibrateArgs {
    /// Reference recordings (WAV, FLAC or AIFF) of one membrane at the known tension.
    #[arg(required = true)]
    pub recordings: Vec<PathBuf>,
    #[command(flatten)]
    pub panel: PanelArgs,
    #[command(flatten)]
    pub input: InputArgs,
    /// The known tension, e.g. 3000N/m or 30N/cm.
    #[arg(long)]
    pub tension: String,
    /// Its standard uncertainty (k = 1), e.g. 30N/m.
    #[arg(long)]
    pub tension_u: String,
    /// Model used to label the references: isotropic (default) or air (light film in air).
    #[arg(long)]
    pub model: Option<String>,
    /// Calibration file to write (TOML).
    #[arg(long)]
    pub out: PathBuf,
}

/// Arguments of `tonus modes`.
#[derive(Debug, Args)]
pub struct ModesArgs {
    #[command(flatten)]
    pub panel: PanelArgs,
    /// Tension, e.g. 2500N/m or 25N/cm.
    #[arg(long, conflicts_with = "fundamental")]
    pub tension: Option<String>,
    /// Target fundamental, e.g. 180Hz: prints the tension that gives it.
    #[arg(long)]
    pub fundamental: Option<String>,
    /// Number of lines to list.
    #[arg(long, default_value_t = 12)]
    pub count: usize,
    /// Unit for tensions: N/m, N/cm, kN/m, lbf/in.
    #[arg(long, default_value = "N/m")]
    pub tension_unit: String,
    /// Print JSON.
    #[arg(long)]
    pub json: bool,
}

/// Arguments of `tonus synth`.
#[derive(Debug, Args)]
pub struct SynthArgs {
    #[command(flatten)]
    pub panel: PanelArgs,
    /// Tension, e.g. 2500N/m.
    #[arg(long)]
    pub tension: String,
    /// Output WAV file.
    #[arg(short = 'o', long = "output")]
    pub output: PathBuf,
    /// Signal-to-noise ratio in dB.
    #[arg(long, default_value_t = synth::DEFAULT_SNR_DB)]
    pub snr: f64,
    /// T60 of the fundamental, e.g. 0.8s [default: 0.8s].
    #[arg(long)]
    pub t60: Option<String>,
    /// Tap pulse duration, e.g. 0.5ms [default: 0.5ms].
    #[arg(long)]
    pub tap_duration: Option<String>,
    /// Recording length, e.g. 1.5s [default: 1.5s].
    #[arg(long)]
    pub length: Option<String>,
    /// Silence before the first tap, e.g. 100ms [default: 100ms].
    #[arg(long)]
    pub pre_roll: Option<String>,
    /// Sample rate in Hz.
    #[arg(long, default_value_t = synth::DEFAULT_SAMPLE_RATE_HZ)]
    pub rate: u32,
    /// Sample format: 16, 24 or 32f.
    #[arg(long, default_value = "16")]
    pub bits: String,
    /// Mains hum: 50Hz or 60Hz.
    #[arg(long)]
    pub hum: Option<String>,
    /// Hum level in dB relative to the tap.
    #[arg(long, default_value_t = -20.0, allow_hyphen_values = true)]
    pub hum_level: f64,
    /// Extra tone FREQ:LEVEL or FREQ:LEVEL:T60, e.g. 333Hz:-20:0.3s (level in dB re the strongest mode); repeatable.
    #[arg(long = "extra-tone")]
    pub extra_tone: Vec<String>,
    /// Number of taps.
    #[arg(long, default_value_t = 1)]
    pub taps: usize,
    /// Time between taps, e.g. 0.6s [default: 0.6s].
    #[arg(long)]
    pub tap_interval: Option<String>,
    /// Gain in dB after scaling to -3 dBFS (positive values clip).
    #[arg(long, default_value_t = 0.0, allow_hyphen_values = true)]
    pub gain: f64,
    /// Noise seed.
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
    /// Lower the modes by air loading (a light film in air).
    #[arg(long)]
    pub air: bool,
    /// Tension along y (rectangle; --tension is then along x).
    #[arg(long)]
    pub tension_y: Option<String>,
    /// Bending stiffness D in N·m (rectangle, simply supported plate), e.g. 0.02.
    #[arg(long)]
    pub bending_stiffness: Option<f64>,
    /// Uneven tension on a circle: Txx = T(1+ε), Tyy = T(1−ε), ε as a fraction or percent, e.g. 0.02 or 2% (splits each (1,n) pair; tap off the axes, e.g. --tap-at 0.6,30, to hear both members).
    #[arg(long)]
    pub tension_skew: Option<String>,
    #[command(flatten)]
    pub round: RoundSynthArgs,
}

/// Arguments of `tonus inspect`.
#[derive(Debug, Args)]
pub struct InspectArgs {
    /// Specification file (TOML).
    #[arg(long)]
    pub spec: PathBuf,
    /// Recordings and folders of recordings.
    #[arg(required_unless_present = "watch", conflicts_with = "watch")]
    pub inputs: Vec<PathBuf>,
    /// Station mode: decide each new recording (.wav, .flac, .aif, .aiff,
    /// .aifc) as it lands in this folder
    /// (files already there are left alone).
    #[arg(long, value_name = "DIR")]
    pub watch: Option<PathBuf>,
    /// Watch mode: time between two listings of the folder, 50ms to 10s
    /// [default: 500ms].
    #[arg(long, value_name = "DURATION", requires = "watch")]
    pub watch_interval: Option<String>,
    /// Watch mode: stop after this many recordings.
    #[arg(long, value_name = "N", requires = "watch")]
    pub watch_limit: Option<usize>,
    /// Watch mode: stop after this long, e.g. 60s or 28800s.
    #[arg(long, value_name = "DURATION", requires = "watch")]
    pub watch_timeout: Option<String>,
    /// Folder for inspect.csv, inspect.jsonl and the batch report.
    #[arg(long, default_value = "inspect-out")]
    pub out: PathBuf,
    /// History database.
    #[arg(long, default_value = "tonus-history.sqlite")]
    pub history: PathBuf,
    /// Do not write the history.
    #[arg(long)]
    pub no_history: bool,
    /// Station name for the record.
    #[arg(long)]
    pub station: Option<String>,
    /// Operator name for the record.
    #[arg(long)]
    pub operator: Option<String>,
    /// Which recordings get the damped-sinusoid refinement: always,
    /// near-limits (those whose decision a shift of 10 fit
    /// uncertainties would change) or never.
    #[arg(long, value_name = "WHEN", default_value = "near-limits", value_parser = ["always", "near-limits", "never"])]
    pub refine: String,
    /// FFT peaks only, the same as --refine never.
    #[arg(long, conflicts_with = "refine")]
    pub peaks_only: bool,
}

/// Arguments of `tonus history`.
#[derive(Debug, Args)]
pub struct HistoryArgs {
    /// History database.
    #[arg(long, default_value = "tonus-history.sqlite")]
    pub db: PathBuf,
    /// Only this specification (panel type) name.
    #[arg(long)]
    pub spec: Option<String>,
    /// From this time (RFC 3339, e.g. 2026-12-01T00:00:00Z).
    #[arg(long)]
    pub since: Option<String>,
    /// Before this time (RFC 3339).
    #[arg(long)]
    pub until: Option<String>,
    /// Only this decision: pass, fail, indeterminate, not_measured.
    #[arg(long)]
    pub decision: Option<String>,
    /// Export as CSV to this file instead of listing.
    #[arg(long)]
    pub csv: Option<PathBuf>,
}

/// Arguments of `tonus demo`.
#[derive(Debug, Args)]
pub struct DemoArgs {
    /// Folder of recordings, each with a NAME.panel.toml beside it.
    #[arg(long, default_value = "demo-recordings")]
    pub recordings: PathBuf,
    /// Folder for the reports.
    #[arg(long, default_value = "reports")]
    pub out: PathBuf,
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
    #[arg(long, required_unless_present = "points", conflicts_with = "points")]
    pub lugs: Option<usize>,
    /// A rectangular panel or screen instead of a head: each tap's point
    /// as fractions of width and height, in tap order, e.g.
    /// "0.3,0.2 0.7,0.35 0.25,0.65" (biaxial model; gives the tighter
    /// axis, Tx and Ty from all the taps).
    #[arg(long)]
    pub points: Option<String>,
    /// Angle of lug 1 in degrees, counter-clockwise from the head's 0°
    /// mark, seen from above.
    #[arg(long, default_value_t = 0.0, allow_hyphen_values = true)]
    pub first_lug: f64,
    /// Which way the lugs are numbered, seen from above: cw or ccw.
    #[arg(long, default_value = "cw")]
    pub direction: String,
    /// Largest deviation of a lug from the mean that is still even, as a
    /// percentage of the mean.
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
    /// Raw PCM: interleaved channels (mixed to one).
    #[arg(long, default_value_t = 1)]
    pub pcm_channels: u16,
    /// Raw PCM: sample format s16, s24, s32 or f32, little-endian.
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
    /// many dB.
    #[arg(long, default_value_t = 0.0)]
    pub tap_spread: f64,
}
