//! Reading a recording: the format told by its first bytes, then one
//! shared check of channels, clipping, DC and length.

use crate::base::error::{Result, TonusError};
use std::path::Path;

use super::decoded::*;
use super::flac_aiff::{decode_with_symphonia, Kind};
use super::types::*;
use super::wav::{decode_wav, rf64_to_riff};

/// Reads and checks a recording: WAV (RIFF or RF64), FLAC or AIFF/AIFF-C,
/// told apart by the file's first bytes (see the module notes).
///
/// # Errors
/// A missing or unreadable file, content that is none of these formats, a
/// truncated or corrupt file, an unsupported sample rate, a channel that
/// does not exist, a recording that is too short, silent, or clipped almost
/// everywhere.
pub fn read_audio(path: &Path, channel: ChannelChoice) -> Result<Recording> {
    let mut bytes = std::fs::read(path).map_err(|e| TonusError::Io {
        path: path.to_path_buf(),
        reason: e.to_string(),
    })?;
    let decoded = match sniff(&bytes) {
        Container::Wav => decode_wav(path, &bytes)?,
        Container::Rf64 => {
            rf64_to_riff(path, &mut bytes)?;
            decode_wav(path, &bytes)?
        }
        Container::Flac { offset } => {
            bytes.drain(..offset);
            decode_with_symphonia(path, bytes, Kind::Flac)?
        }
        Container::Aiff => decode_with_symphonia(path, bytes, Kind::Aiff)?,
        Container::Unknown(found) => {
            return Err(TonusError::UnknownAudio {
                path: path.to_path_buf(),
                found,
            })
        }
    };
    finish(path, decoded, channel)
}

/// Reads and checks a recording; the same as [`read_audio`], which reads
/// FLAC and AIFF as well as WAV. Kept under its old name for existing
/// callers.
///
/// # Errors
/// As [`read_audio`].
pub fn read_wav(path: &Path, channel: ChannelChoice) -> Result<Recording> {
    read_audio(path, channel)
}

/// The checks and the post-processing every format shares: channel choice
/// (mix-down or one channel), rate and length limits, clipping count (full
/// scale and flat tops), DC removal, silence.
pub(super) fn finish(path: &Path, decoded: Decoded, channel: ChannelChoice) -> Result<Recording> {
    let Decoded {
        interleaved,
        full_scale_hits,
        channels: file_channels,
        sample_rate,
        bits,
        float,
    } = decoded;
    let channels = file_channels as usize;
    if channels == 0 {
        return Err(bad(path, "the file declares 0 channels", "re-export it"));
    }
    if let ChannelChoice::Index(i) = channel {
        if i >= channels {
            return Err(TonusError::OutOfRange {
                key: "--channel".into(),
                value: (i + 1).to_string(),
                why: format!(
                    "{} has {} channel(s); choose 1 to {}",
                    path.display(),
                    channels,
                    channels
                ),
            });
        }
    }
    let frames = interleaved.len() / channels;
    let mut clipped = 0usize;
    let samples = if channels == 1 {
        // One channel: the decoded samples as they are.
        clipped = full_scale_hits.iter().filter(|&&h| h).count();
        interleaved
    } else {
        let mut samples = Vec::with_capacity(frames);
        for f in 0..frames {
            let frame = &interleaved[f * channels..(f + 1) * channels];
            let hits = &full_scale_hits[f * channels..(f + 1) * channels];
            match channel {
                ChannelChoice::MixDown => {
                    samples.push(frame.iter().sum::<f64>() / channels as f64);
                    if hits.iter().any(|&h| h) {
                        clipped += 1;
                    }
                }
                ChannelChoice::Index(i) => {
                    samples.push(frame[i]);
                    if hits[i] {
                        clipped += 1;
                    }
                }
            }
        }
        samples
    };
    let rate = sample_rate;
    if !(MIN_SAMPLE_RATE_HZ..=MAX_SAMPLE_RATE_HZ).contains(&rate) {
        return Err(bad(
            path,
            &format!("sample rate {rate} Hz is outside 8000..192000 Hz"),
            "resample the recording to 44.1 or 48 kHz",
        ));
    }
    let duration = frames as f64 / rate as f64;
    if duration < MIN_DURATION_S {
        return Err(bad(
            path,
            &format!(
                "the recording is only {frames} sample(s) ({:.1} ms) long",
                duration * 1e3
            ),
            "record at least 0.1 s after the tap (1 s or more is better)",
        ));
    }
    // Flat tops below full scale (clipping in an analogue stage, then
    // scaled) show as runs of identical extreme samples.
    clipped += count_flat_tops(&samples);
    let clipped_fraction = (clipped as f64 / frames as f64).min(1.0);
    let peak = samples.iter().fold(0.0f64, |m, x| m.max(x.abs()));
    let mut rec = Recording {
        path: path.to_path_buf(),
        samples,
        sample_rate_hz: rate as f64,
        channels: file_channels,
        bits_per_sample: bits,
        sample_format: if float {
            SampleFormat::Float
        } else {
            SampleFormat::Pcm
        },
        clipped_fraction,
        dc_offset: 0.0,
    };
    rec.dc_offset = remove_dc(&mut rec.samples);
    let peak_ac = rec.samples.iter().fold(0.0f64, |m, x| m.max(x.abs()));
    if peak < SILENCE_PEAK_FS || peak_ac < SILENCE_PEAK_FS {
        return Err(bad(
            path,
            &format!("the recording is silent (peak {:.1e} of full scale)", peak),
            "check the microphone and input gain, then tap again",
        ));
    }
    if clipped_fraction > MAX_CLIPPED_FRACTION {
        return Err(bad(
            path,
            &format!(
                "{:.0} % of the samples are clipped",
                clipped_fraction * 100.0
            ),
            "lower the input gain or move the microphone away and record again",
        ));
    }
    Ok(rec)
}

/// The container, told by the first bytes of the file.
#[derive(Debug, PartialEq, Eq)]
pub(super) enum Container {
    /// `RIFF` … `WAVE`.
    Wav,
    /// `RF64` … `WAVE` (EBU Tech 3306): sizes in a `ds64` chunk.
    Rf64,
    /// `fLaC`, at `offset` (after an ID3v2 tag, or 0).
    Flac { offset: usize },
    /// `FORM` … `AIFF` or `AIFC`.
    Aiff,
    /// None of these: what was found, for the message.
    Unknown(String),
}

/// Tells the container from the first bytes of the file.
pub(super) fn sniff(b: &[u8]) -> Container {
    if b.is_empty() {
        return Container::Unknown("the file is empty".into());
    }
    let at = |i: usize, tag: &[u8]| b.len() >= i + tag.len() && &b[i..i + tag.len()] == tag;
    if at(0, b"RIFF") && at(8, b"WAVE") {
        return Container::Wav;
    }
    if at(0, b"RF64") && at(8, b"WAVE") {
        return Container::Rf64;
    }
    if at(0, b"fLaC") {
        return Container::Flac { offset: 0 };
    }
    if at(0, b"FORM") && (at(8, b"AIFF") || at(8, b"AIFC")) {
        return Container::Aiff;
    }
    // An ID3v2 tag before a FLAC stream: "ID3", version (2 bytes), flags,
    // then the tag size as a 28-bit "syncsafe" integer (7 bits a byte);
    // the header is 10 bytes, and a footer (flag 0x10) adds 10 more.
    if at(0, b"ID3") && b.len() >= 10 {
        let size = b[6..10]
            .iter()
            .fold(0usize, |acc, &x| (acc << 7) | (x & 0x7f) as usize);
        let footer = if b[5] & 0x10 != 0 { 10 } else { 0 };
        let offset = 10 + size + footer;
        if at(offset, b"fLaC") {
            return Container::Flac { offset };
        }
    }
    let head = &b[..b.len().min(12)];
    let hex: Vec<String> = head.iter().map(|x| format!("{x:02x}")).collect();
    let text: String = head
        .iter()
        .map(|&x| {
            if x.is_ascii_graphic() || x == b' ' {
                x as char
            } else {
                '.'
            }
        })
        .collect();
    let what = if at(0, b"RIFF") || at(0, b"RF64") || at(0, b"FORM") {
        "a RIFF or IFF container that is cut short or of another kind"
    } else {
        "no audio header"
    };
    Container::Unknown(format!("{what}: it begins {} \"{text}\"", hex.join(" ")))
}

/// Counts samples in runs of [`FLAT_TOP_RUN`] or more identical values at
/// the recording's own extreme, when that extreme is loud (above a quarter
/// of full scale) and not already counted as full scale. The run length is
/// long enough that the quantised crest of a clean low tone (about eight
/// equal 16-bit samples for 20 Hz at 48 kHz) does not count.
pub(super) fn count_flat_tops(samples: &[f64]) -> usize {
    let peak = samples.iter().fold(0.0f64, |m, x| m.max(x.abs()));
    if !(0.25..0.999).contains(&peak) {
        return 0;
    }
    // Identical to the peak: stuck samples are bit-identical.
    let tol = 1e-12;
    let mut count = 0;
    let mut run = 0;
    for &x in samples {
        if (x.abs() - peak).abs() <= tol {
            run += 1;
        } else {
            if run >= FLAT_TOP_RUN {
                count += run;
            }
            run = 0;
        }
    }
    if run >= FLAT_TOP_RUN {
        count += run;
    }
    count
}
