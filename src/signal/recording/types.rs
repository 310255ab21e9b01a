//! A recording read into memory ([`Recording`]) and the choices and
//! limits of reading one.

use serde::Serialize;
use std::path::{Path, PathBuf};

use super::decoded::remove_dc;

/// Lowest sample rate accepted, in Hz.
pub const MIN_SAMPLE_RATE_HZ: u32 = 8_000;

/// Highest sample rate accepted, in Hz.
pub const MAX_SAMPLE_RATE_HZ: u32 = 192_000;

/// Shortest recording that can hold a tap and its decay, in seconds.
pub const MIN_DURATION_S: f64 = 0.05;

/// A recording quieter than this peak (full scale = 1) is treated as silence.
pub const SILENCE_PEAK_FS: f64 = 1e-5;

/// Shortest run of identical extreme samples counted as a flat top.
pub const FLAT_TOP_RUN: usize = 12;

/// Clipped fraction above which the recording is refused.
pub const MAX_CLIPPED_FRACTION: f64 = 0.2;

/// Which channel of a multi-channel file to analyse.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ChannelChoice {
    /// Average all channels.
    MixDown,
    /// Use one channel, counted from 0.
    Index(usize),
}

/// How the samples were stored in the file.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum SampleFormat {
    /// Signed (or 8-bit unsigned) integer PCM.
    Pcm,
    /// IEEE float.
    Float,
}

/// One decoded recording.
#[derive(Debug, Clone)]
pub struct Recording {
    /// Where it came from.
    pub path: PathBuf,
    /// Mono samples, full scale 1.0, DC removed.
    pub samples: Vec<f64>,
    /// Sample rate in Hz.
    pub sample_rate_hz: f64,
    /// Channels in the file (before mix-down).
    pub channels: u16,
    /// Bits per sample in the file.
    pub bits_per_sample: u16,
    /// Integer or float storage.
    pub sample_format: SampleFormat,
    /// Fraction of samples (of the analysed channel(s)) at or stuck near full scale.
    pub clipped_fraction: f64,
    /// DC offset that was removed, in full-scale units.
    pub dc_offset: f64,
}

impl Recording {
    /// Duration in seconds.
    pub fn duration_s(&self) -> f64 {
        self.samples.len() as f64 / self.sample_rate_hz
    }

    /// Builds a recording from samples already in memory (synthesis, tests).
    /// The DC offset is removed; no clipping is assumed beyond |x| ≥ 1.
    pub fn from_samples(path: &Path, samples: Vec<f64>, sample_rate_hz: f64) -> Recording {
        let clipped = samples.iter().filter(|x| x.abs() >= 1.0).count();
        let n = samples.len().max(1) as f64;
        let mut r = Recording {
            path: path.to_path_buf(),
            samples,
            sample_rate_hz,
            channels: 1,
            bits_per_sample: 64,
            sample_format: SampleFormat::Float,
            clipped_fraction: clipped as f64 / n,
            dc_offset: 0.0,
        };
        r.dc_offset = remove_dc(&mut r.samples);
        r
    }
}
