//! What every decoder hands on ([`Decoded`]), the errors they share,
//! and the checks on samples.

use crate::base::error::TonusError;
use std::path::Path;

/// Interleaved samples as decoded, before the channel choice.
pub(super) struct Decoded {
    /// Interleaved samples, full scale 1.
    pub(super) interleaved: Vec<f64>,
    /// One flag per interleaved sample: at digital full scale.
    pub(super) full_scale_hits: Vec<bool>,
    pub(super) channels: u16,
    pub(super) sample_rate: u32,
    pub(super) bits: u16,
    pub(super) float: bool,
}

/// Subtracts the mean and returns it.
pub(super) fn remove_dc(samples: &mut [f64]) -> f64 {
    if samples.is_empty() {
        return 0.0;
    }
    let mean = samples.iter().sum::<f64>() / samples.len() as f64;
    for x in samples.iter_mut() {
        *x -= mean;
    }
    mean
}

pub(super) fn bad(path: &Path, problem: &str, hint: &str) -> TonusError {
    TonusError::BadRecording {
        path: path.to_path_buf(),
        problem: problem.to_string(),
        hint: hint.to_string(),
    }
}

pub(super) fn not_wav(path: &Path, reason: &str) -> TonusError {
    TonusError::NotWav {
        path: path.to_path_buf(),
        reason: reason.to_string(),
    }
}

pub(super) fn u16_at(b: &[u8], i: usize) -> u16 {
    u16::from_le_bytes([b[i], b[i + 1]])
}

pub(super) fn u32_at(b: &[u8], i: usize) -> u32 {
    u32::from_le_bytes([b[i], b[i + 1], b[i + 2], b[i + 3]])
}
