//! Audio input: WAV, RF64, FLAC and AIFF/AIFF-C files into one channel of
//! `f64` samples.
//!
//! Conventions: samples are scaled so that digital full scale is 1.0
//! (integer PCM is divided by 2^(bits−1); float is taken as is), the mean
//! is subtracted (DC offset removal), and multi-channel files are mixed down
//! by averaging unless one channel is chosen. This is the only module that
//! reads files.
//!
//! The format is told by the file's first bytes, never by its name:
//! `RIFF` (WAV), `RF64` (WAV with 64-bit sizes), `fLaC` (FLAC, also after
//! an ID3v2 tag) and `FORM` (AIFF or AIFF-C). Anything else is refused with
//! the bytes found.
//!
//! WAV: hound decodes PCM 8/16/24/32-bit, float 32 and WAVE_FORMAT_EXTENSIBLE;
//! it refuses 64-bit float, which this module decodes itself from the RIFF
//! chunks (format tag 3, or EXTENSIBLE with the IEEE-float sub-format). An
//! RF64 header is rewritten in memory into the RIFF header it stands for
//! (`ds64` becomes `JUNK`, the data size comes from `ds64`) and then read as
//! WAV.
//!
//! FLAC and AIFF/AIFF-C are decoded by symphonia (pure Rust). Its integer
//! samples are left-justified in their container and divided by 2^(width−1),
//! which gives exactly the WAV path's value v/2^(bits−1); a FLAC stream is
//! checked against its MD5 signature and its declared length, and an AIFF
//! sound chunk against the frame count of its `COMM` chunk, so a cut or
//! corrupt file is an error, never a shorter recording.

mod decoded;
mod flac_aiff;
mod read;
mod types;
mod wav;
mod write;

pub use read::{read_audio, read_wav};
pub use types::{
    ChannelChoice, Recording, SampleFormat, FLAT_TOP_RUN, MAX_CLIPPED_FRACTION, MAX_SAMPLE_RATE_HZ,
    MIN_DURATION_S, MIN_SAMPLE_RATE_HZ, SILENCE_PEAK_FS,
};
pub use write::write_wav;

#[cfg(test)]
mod tests;
