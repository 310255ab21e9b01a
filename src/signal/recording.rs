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

use crate::base::error::{Result, TonusError};
use serde::Serialize;
use std::path::{Path, PathBuf};

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

/// Interleaved samples as decoded, before the channel choice.
struct Decoded {
    /// Interleaved samples, full scale 1.
    interleaved: Vec<f64>,
    /// One flag per interleaved sample: at digital full scale.
    full_scale_hits: Vec<bool>,
    channels: u16,
    sample_rate: u32,
    bits: u16,
    float: bool,
}

/// Decodes a RIFF/WAVE file (also one rewritten from RF64).
fn decode_wav(path: &Path, bytes: &[u8]) -> Result<Decoded> {
    let header = scan_header(path, bytes)?;
    let (interleaved, full_scale_hits) = if header.float && header.bits == 64 {
        decode_f64(path, bytes, &header)?
    } else if header.pcm
        && header.bits == 16
        && header.block_align as usize == 2 * header.channels as usize
    {
        decode_pcm16(bytes, &header)
    } else {
        decode_with_hound(path, bytes, &header)?
    };
    Ok(Decoded {
        interleaved,
        full_scale_hits,
        channels: header.channels,
        sample_rate: header.sample_rate,
        bits: header.bits,
        float: header.float,
    })
}

/// The checks and the post-processing every format shares: channel choice
/// (mix-down or one channel), rate and length limits, clipping count (full
/// scale and flat tops), DC removal, silence.
fn finish(path: &Path, decoded: Decoded, channel: ChannelChoice) -> Result<Recording> {
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

/// Subtracts the mean and returns it.
fn remove_dc(samples: &mut [f64]) -> f64 {
    if samples.is_empty() {
        return 0.0;
    }
    let mean = samples.iter().sum::<f64>() / samples.len() as f64;
    for x in samples.iter_mut() {
        *x -= mean;
    }
    mean
}

/// Counts samples in runs of [`FLAT_TOP_RUN`] or more identical values at
/// the recording's own extreme, when that extreme is loud (above a quarter
/// of full scale) and not already counted as full scale. The run length is
/// long enough that the quantised crest of a clean low tone (about eight
/// equal 16-bit samples for 20 Hz at 48 kHz) does not count.
fn count_flat_tops(samples: &[f64]) -> usize {
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

fn bad(path: &Path, problem: &str, hint: &str) -> TonusError {
    TonusError::BadRecording {
        path: path.to_path_buf(),
        problem: problem.to_string(),
        hint: hint.to_string(),
    }
}

fn not_wav(path: &Path, reason: &str) -> TonusError {
    TonusError::NotWav {
        path: path.to_path_buf(),
        reason: reason.to_string(),
    }
}

/// The container, told by the first bytes of the file.
#[derive(Debug, PartialEq, Eq)]
enum Container {
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
fn sniff(b: &[u8]) -> Container {
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

/// Rewrites an RF64 header in memory into the RIFF header it stands for
/// (EBU Tech 3306): `RF64` becomes `RIFF` with the file's length, the
/// `ds64` chunk (which must come first) becomes a `JUNK` chunk, and a data
/// chunk whose 32-bit size is the placeholder 0xFFFFFFFF gets the 64-bit
/// size from `ds64`. The WAV reader then takes it as it is.
fn rf64_to_riff(path: &Path, b: &mut [u8]) -> Result<()> {
    // ds64 body: RIFF size (u64), data size (u64), sample count (u64),
    // table length (u32).
    if b.len() < 12 + 8 + 24 || &b[12..16] != b"ds64" || (u32_at(b, 16) as usize) < 24 {
        return Err(not_wav(
            path,
            "an RF64 file without a ds64 chunk after its header",
        ));
    }
    let mut d = [0u8; 8];
    d.copy_from_slice(&b[28..36]);
    let data_size = u64::from_le_bytes(d);
    let Ok(data_size) = u32::try_from(data_size) else {
        return Err(bad(
            path,
            &format!("the RF64 data chunk holds {data_size} bytes, more than 4 GiB"),
            "cut the recording to the tap and its decay",
        ));
    };
    b[0..4].copy_from_slice(b"RIFF");
    let riff_len = u32::try_from(b.len() - 8).unwrap_or(u32::MAX);
    b[4..8].copy_from_slice(&riff_len.to_le_bytes());
    b[12..16].copy_from_slice(b"JUNK");
    let mut i = 12;
    while i + 8 <= b.len() {
        let len = u32_at(b, i + 4);
        if &b[i..i + 4] == b"data" {
            if len == u32::MAX {
                b[i + 4..i + 8].copy_from_slice(&data_size.to_le_bytes());
            }
            break;
        }
        let len = len as usize;
        i = i + 8 + len + (len & 1);
    }
    Ok(())
}

/// The containers decoded through symphonia.
#[derive(Debug, Clone, Copy)]
enum Kind {
    Flac,
    Aiff,
}

impl Kind {
    fn name(self) -> &'static str {
        match self {
            Kind::Flac => "FLAC",
            Kind::Aiff => "AIFF",
        }
    }
}

/// Decodes a FLAC or AIFF/AIFF-C file with symphonia. The decoding runs
/// under `catch_unwind`, so that a malformed file that trips a panic in the
/// decoder becomes an error instead of ending the program (or a batch).
fn decode_with_symphonia(path: &Path, bytes: Vec<u8>, kind: Kind) -> Result<Decoded> {
    match std::panic::catch_unwind(|| decode_symphonia_inner(path, bytes, kind)) {
        Ok(r) => r,
        Err(_) => Err(bad(
            path,
            &format!(
                "the {} data cannot be decoded (the decoder failed)",
                kind.name()
            ),
            "the file is probably corrupt: copy or export the recording again",
        )),
    }
}

fn decode_symphonia_inner(path: &Path, bytes: Vec<u8>, kind: Kind) -> Result<Decoded> {
    use symphonia::core::audio::SampleBuffer;
    use symphonia::core::codecs::{
        Decoder, DecoderOptions, CODEC_TYPE_PCM_F32BE, CODEC_TYPE_PCM_F32LE, CODEC_TYPE_PCM_F64BE,
        CODEC_TYPE_PCM_F64LE,
    };
    use symphonia::core::errors::Error as SymError;
    use symphonia::core::formats::{FormatOptions, FormatReader};
    use symphonia::core::io::MediaSourceStream;

    let name = kind.name();
    // The frame count the file declares. symphonia 0.5.5 counts an AIFF
    // file's frames from the SSND chunk's length including its 8-byte
    // offset and block-size fields (4 frames too many at 16-bit mono), so
    // the `COMM` chunk's own count is read here instead.
    let comm_frames = match kind {
        Kind::Flac => None,
        Kind::Aiff => aiff_comm_frames(&bytes),
    };
    let corrupt = |what: String| {
        bad(
            path,
            &what,
            "the file is cut or corrupt: copy or export the recording again",
        )
    };
    let mss = MediaSourceStream::new(Box::new(std::io::Cursor::new(bytes)), Default::default());
    let opts = FormatOptions::default();
    let reader: std::result::Result<Box<dyn FormatReader>, SymError> = match kind {
        Kind::Flac => symphonia::default::formats::FlacReader::try_new(mss, &opts)
            .map(|r| Box::new(r) as Box<dyn FormatReader>),
        Kind::Aiff => symphonia::default::formats::AiffReader::try_new(mss, &opts)
            .map(|r| Box::new(r) as Box<dyn FormatReader>),
    };
    let mut reader =
        reader.map_err(|e| corrupt(format!("the {name} header cannot be read ({e})")))?;
    let Some(track) = reader.default_track() else {
        return Err(corrupt(format!("the {name} file holds no audio track")));
    };
    let track_id = track.id;
    let params = track.codec_params.clone();
    let channels = params.channels.map(|c| c.count()).unwrap_or(0);
    let Ok(channels) = u16::try_from(channels) else {
        return Err(corrupt(format!(
            "the {name} file declares {channels} channels"
        )));
    };
    if channels == 0 {
        return Err(bad(path, "the file declares 0 channels", "re-export it"));
    }
    let Some(sample_rate) = params.sample_rate else {
        return Err(corrupt(format!("the {name} header gives no sample rate")));
    };
    let float = [
        CODEC_TYPE_PCM_F32BE,
        CODEC_TYPE_PCM_F32LE,
        CODEC_TYPE_PCM_F64BE,
        CODEC_TYPE_PCM_F64LE,
    ]
    .contains(&params.codec);
    let bits = params
        .bits_per_sample
        .or(params.bits_per_coded_sample)
        .unwrap_or(if float { 32 } else { 16 });
    let mut decoder: Box<dyn Decoder> = symphonia::default::get_codecs()
        .make(&params, &DecoderOptions { verify: true })
        .map_err(|e| corrupt(format!("the {name} samples cannot be decoded ({e})")))?;

    // Integer PCM of `bits` bits reaches full scale at (2^(bits−1) − 1)/2^(bits−1)
    // and at −1; float at |x| ≥ 0.999, as in the WAV path.
    let top = 1.0 - 2f64.powi(1 - bits.clamp(1, 32) as i32);
    let mut out: Vec<f64> = Vec::new();
    let mut hits: Vec<bool> = Vec::new();
    if let Some(n) = params.n_frames {
        // Reserve for the declared length, but no more than 4 Mi samples
        // (32 MB) up front: a corrupt header may declare any length.
        let cap = (n as usize).saturating_mul(channels as usize).min(1 << 22);
        out.reserve(cap);
        hits.reserve(cap);
    }
    let mut buf: Option<SampleBuffer<f64>> = None;
    loop {
        let packet = match reader.next_packet() {
            Ok(p) => p,
            Err(SymError::IoError(e)) if e.kind() == std::io::ErrorKind::UnexpectedEof => break,
            Err(e) => {
                return Err(corrupt(format!(
                    "the {name} stream cannot be read after {} frames ({e})",
                    out.len() / channels as usize
                )))
            }
        };
        if packet.track_id() != track_id {
            continue;
        }
        let decoded = decoder.decode(&packet).map_err(|e| {
            corrupt(format!(
                "the {name} data cannot be decoded after {} frames ({e})",
                out.len() / channels as usize
            ))
        })?;
        let signal_spec = *decoded.spec();
        if signal_spec.channels.count() != channels as usize {
            return Err(corrupt(format!(
                "the {name} stream changes from {channels} to {} channels",
                signal_spec.channels.count()
            )));
        }
        // Reuse the sample buffer while it is large enough (capacity counts
        // samples of all channels).
        if buf
            .as_ref()
            .is_some_and(|b| b.capacity() < decoded.capacity() * channels as usize)
        {
            buf = None;
        }
        let b =
            buf.get_or_insert_with(|| SampleBuffer::new(decoded.capacity() as u64, signal_spec));
        b.copy_interleaved_ref(decoded);
        for &x in b.samples() {
            if float {
                if !x.is_finite() {
                    return Err(bad(
                        path,
                        &format!("sample {} is not a finite number", out.len()),
                        "export the recording again",
                    ));
                }
                hits.push(x.abs() >= 0.999);
            } else {
                hits.push(x >= top || x <= -1.0);
            }
            out.push(x);
        }
    }
    let declared = match kind {
        Kind::Flac => params.n_frames.filter(|&n| n > 0),
        Kind::Aiff => comm_frames,
    };
    let got = (out.len() / channels as usize) as u64;
    if let (Kind::Aiff, Some(n)) = (kind, declared) {
        // Past the declared frames symphonia may have read the fields of a
        // chunk after SSND as samples (see above); they are not sound.
        let keep = (n as usize).saturating_mul(channels as usize);
        out.truncate(keep);
        hits.truncate(keep);
    }
    if let Some(declared) = declared {
        if got < declared {
            return Err(bad(
                path,
                &format!(
                    "the {name} file declares {declared} frames but only {got} are present (the file is truncated)"
                ),
                "copy or export the recording again",
            ));
        }
    }
    if decoder.finalize().verify_ok == Some(false) {
        return Err(corrupt(format!(
            "the {name} samples do not match the stream's MD5 signature"
        )));
    }
    Ok(Decoded {
        interleaved: out,
        full_scale_hits: hits,
        channels,
        sample_rate,
        bits: bits as u16,
        float,
    })
}

/// The number of sample frames in an AIFF/AIFF-C file's `COMM` chunk
/// (big-endian IFF chunks: id, 32-bit length, body padded to an even
/// length; `COMM` body: channels i16, frames u32, …), if there is one.
fn aiff_comm_frames(b: &[u8]) -> Option<u64> {
    let mut i = 12;
    while i + 8 <= b.len() {
        let len = u32::from_be_bytes([b[i + 4], b[i + 5], b[i + 6], b[i + 7]]) as usize;
        let body = i + 8;
        if &b[i..i + 4] == b"COMM" {
            let f = b.get(body + 2..body + 6)?;
            return Some(u64::from(u32::from_be_bytes([f[0], f[1], f[2], f[3]])));
        }
        i = body.checked_add(len)?.checked_add(len & 1)?;
    }
    None
}

/// What the RIFF header says, read before decoding.
#[derive(Debug)]
struct Header {
    channels: u16,
    sample_rate: u32,
    bits: u16,
    float: bool,
    /// Integer PCM (format tag 1, or extensible with the PCM subformat).
    pcm: bool,
    block_align: u16,
    data_offset: usize,
    data_len: usize,
}

fn u16_at(b: &[u8], i: usize) -> u16 {
    u16::from_le_bytes([b[i], b[i + 1]])
}
fn u32_at(b: &[u8], i: usize) -> u32 {
    u32::from_le_bytes([b[i], b[i + 1], b[i + 2], b[i + 3]])
}

/// Walks the RIFF chunks far enough to know the format and to find a
/// truncated data chunk before any decoder does.
fn scan_header(path: &Path, b: &[u8]) -> Result<Header> {
    if b.is_empty() {
        return Err(not_wav(path, "the file is empty"));
    }
    if b.len() < 12 || &b[0..4] != b"RIFF" || &b[8..12] != b"WAVE" {
        return Err(not_wav(path, "no RIFF/WAVE header"));
    }
    let mut i = 12;
    let mut fmt: Option<(u16, u16, u32, u16, u16, Option<u16>)> = None;
    while i + 8 <= b.len() {
        let id = &b[i..i + 4];
        let len = u32_at(b, i + 4) as usize;
        let body = i + 8;
        if id == b"fmt " {
            if body + 16 > b.len() || len < 16 {
                return Err(not_wav(path, "the fmt chunk is cut short"));
            }
            let tag = u16_at(b, body);
            let channels = u16_at(b, body + 2);
            let rate = u32_at(b, body + 4);
            let align = u16_at(b, body + 12);
            let bits = u16_at(b, body + 14);
            let sub = if tag == 0xFFFE && len >= 40 && body + 26 <= b.len() {
                Some(u16_at(b, body + 24))
            } else {
                None
            };
            fmt = Some((tag, channels, rate, align, bits, sub));
        } else if id == b"data" {
            let Some((tag, channels, rate, align, bits, sub)) = fmt else {
                return Err(not_wav(path, "the data chunk comes before the fmt chunk"));
            };
            let available = b.len() - body;
            if len > available {
                return Err(bad(
                    path,
                    &format!(
                        "the data chunk declares {len} bytes but only {available} are present (the file is truncated)",
                    ),
                    "copy or export the recording again",
                ));
            }
            let float = tag == 3 || (tag == 0xFFFE && sub == Some(3));
            if !(tag == 1 || tag == 3 || tag == 0xFFFE) {
                return Err(not_wav(
                    path,
                    &format!("format tag {tag:#06x} is compressed or unknown"),
                ));
            }
            return Ok(Header {
                channels,
                sample_rate: rate,
                bits,
                float,
                pcm: tag == 1 || (tag == 0xFFFE && sub == Some(1)),
                block_align: align,
                data_offset: body,
                data_len: len,
            });
        }
        // Chunks are padded to an even length.
        i = body + len + (len & 1);
    }
    Err(not_wav(path, "no data chunk"))
}

/// Decodes through hound; returns interleaved samples and per-sample
/// full-scale flags.
fn decode_with_hound(path: &Path, bytes: &[u8], header: &Header) -> Result<(Vec<f64>, Vec<bool>)> {
    let reader = hound::WavReader::new(std::io::Cursor::new(bytes))
        .map_err(|e| not_wav(path, &e.to_string()))?;
    let wav_spec = reader.spec();
    let mut out = Vec::with_capacity(header.data_len / (header.bits.max(8) as usize / 8).max(1));
    let mut hits = Vec::with_capacity(out.capacity());
    let decode_err = |e: hound::Error| {
        bad(
            path,
            &format!("the sample data cannot be decoded ({e})"),
            "export the recording again as PCM or float WAV",
        )
    };
    match wav_spec.sample_format {
        hound::SampleFormat::Float => {
            for s in reader.into_samples::<f32>() {
                let x = s.map_err(decode_err)? as f64;
                hits.push(x.abs() >= 0.999);
                out.push(x);
            }
        }
        hound::SampleFormat::Int => {
            let bits = wav_spec.bits_per_sample as i32;
            let scale = 2f64.powi(bits - 1);
            let max = scale - 1.0;
            for s in reader.into_samples::<i32>() {
                let v = s.map_err(decode_err)? as f64;
                hits.push(v >= max || v <= -scale);
                out.push(v / scale);
            }
        }
    }
    Ok((out, hits))
}

/// Decodes 16-bit PCM, the common case, straight from the bytes (the same
/// values and full-scale flags as through hound, in a tenth of the time).
fn decode_pcm16(bytes: &[u8], header: &Header) -> (Vec<f64>, Vec<bool>) {
    let data = &bytes[header.data_offset..header.data_offset + header.data_len];
    let n = data.len() / 2;
    let mut out = Vec::with_capacity(n);
    let mut hits = Vec::with_capacity(n);
    for pair in data.chunks_exact(2) {
        let v = i16::from_le_bytes([pair[0], pair[1]]);
        hits.push(v == i16::MAX || v == i16::MIN);
        out.push(v as f64 / 32768.0);
    }
    (out, hits)
}

/// Decodes 64-bit IEEE float samples, which hound does not support.
fn decode_f64(path: &Path, bytes: &[u8], header: &Header) -> Result<(Vec<f64>, Vec<bool>)> {
    let align = header.block_align as usize;
    if align != 8 * header.channels as usize {
        return Err(not_wav(
            path,
            "64-bit float with an inconsistent block size",
        ));
    }
    let data = &bytes[header.data_offset..header.data_offset + header.data_len];
    let n = data.len() / 8;
    let mut out = Vec::with_capacity(n);
    let mut hits = Vec::with_capacity(n);
    for k in 0..n {
        let mut a = [0u8; 8];
        a.copy_from_slice(&data[8 * k..8 * k + 8]);
        let x = f64::from_le_bytes(a);
        if !x.is_finite() {
            return Err(bad(
                path,
                &format!("sample {k} is not a finite number"),
                "export the recording again",
            ));
        }
        hits.push(x.abs() >= 0.999);
        out.push(x);
    }
    // Whole frames only.
    let ch = header.channels.max(1) as usize;
    let whole = out.len() / ch * ch;
    out.truncate(whole);
    hits.truncate(whole);
    Ok((out, hits))
}

/// Writes mono samples as a WAV file; used by synthesis. `bits` is 16, 24
/// or 32 (float when `float`). Samples beyond full scale are clipped, as a
/// real converter would.
///
/// The file is written to a temporary name and renamed, so a failure never
/// leaves a half-written recording.
pub fn write_wav(
    path: &Path,
    samples: &[f64],
    sample_rate_hz: u32,
    bits: u16,
    float: bool,
) -> Result<()> {
    let wav_spec = hound::WavSpec {
        channels: 1,
        sample_rate: sample_rate_hz,
        bits_per_sample: bits,
        sample_format: if float {
            hound::SampleFormat::Float
        } else {
            hound::SampleFormat::Int
        },
    };
    let werr = |e: String| TonusError::Write {
        path: path.to_path_buf(),
        reason: e,
    };
    let tmp = crate::base::files::temp_path(path);
    {
        let mut w = hound::WavWriter::create(&tmp, wav_spec).map_err(|e| werr(e.to_string()))?;
        let result: std::result::Result<(), hound::Error> = (|| {
            if float {
                for &x in samples {
                    w.write_sample(x.clamp(-1.0, 1.0) as f32)?;
                }
            } else {
                let scale = 2f64.powi(bits as i32 - 1);
                for &x in samples {
                    let v = (x * scale).round().clamp(-scale, scale - 1.0) as i32;
                    w.write_sample(v)?;
                }
            }
            w.finalize()
        })();
        if let Err(e) = result {
            let _ = std::fs::remove_file(&tmp);
            return Err(werr(e.to_string()));
        }
    }
    std::fs::rename(&tmp, path).map_err(|e| werr(e.to_string()))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn dc_is_removed() {
        let mut x = vec![1.0, 2.0, 3.0];
        let m = remove_dc(&mut x);
        assert!((m - 2.0).abs() < 1e-15);
        assert!(x.iter().sum::<f64>().abs() < 1e-12);
    }

    #[test]
    fn flat_tops_are_counted() {
        let mut x: Vec<f64> = (0..1000).map(|i| 0.3 * (i as f64 * 0.01).sin()).collect();
        for v in x.iter_mut() {
            *v = v.clamp(-0.25, 0.25) * 2.0;
        }
        assert!(count_flat_tops(&x) > 100);
        let y: Vec<f64> = (0..1000).map(|i| 0.5 * (i as f64 * 0.05).sin()).collect();
        assert_eq!(count_flat_tops(&y), 0);
    }

    /// A 64-bit float WAV (format tag 3), which hound refuses, written byte
    /// by byte after the RIFF layout (header 44 bytes, little endian).
    #[test]
    fn float64_wav_is_decoded() {
        let sr = 48_000u32;
        let n = 4800usize;
        let samples: Vec<f64> = (0..n)
            .map(|i| {
                0.25 + 0.5 * (2.0 * std::f64::consts::PI * 1000.0 * i as f64 / sr as f64).sin()
            })
            .collect();
        let data_len = (n * 8) as u32;
        let mut b = Vec::new();
        b.extend_from_slice(b"RIFF");
        b.extend_from_slice(&(36 + data_len).to_le_bytes());
        b.extend_from_slice(b"WAVEfmt ");
        b.extend_from_slice(&16u32.to_le_bytes());
        b.extend_from_slice(&3u16.to_le_bytes()); // IEEE float
        b.extend_from_slice(&1u16.to_le_bytes()); // mono
        b.extend_from_slice(&sr.to_le_bytes());
        b.extend_from_slice(&(sr * 8).to_le_bytes());
        b.extend_from_slice(&8u16.to_le_bytes());
        b.extend_from_slice(&64u16.to_le_bytes());
        b.extend_from_slice(b"data");
        b.extend_from_slice(&data_len.to_le_bytes());
        for x in &samples {
            b.extend_from_slice(&x.to_le_bytes());
        }
        let dir = std::env::temp_dir().join(format!("tonus-f64-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        let p = dir.join("f64.wav");
        std::fs::write(&p, &b).unwrap();
        let rec = read_wav(&p, ChannelChoice::MixDown).unwrap();
        let _ = std::fs::remove_dir_all(&dir);
        assert_eq!(rec.bits_per_sample, 64);
        assert_eq!(rec.sample_format, SampleFormat::Float);
        assert_eq!(rec.samples.len(), n);
        // The 0.25 offset is removed; the sine's mean over whole periods is 0.
        assert!((rec.dc_offset - 0.25).abs() < 1e-9);
        assert!((rec.samples[12] - (samples[12] - rec.dc_offset)).abs() < 1e-15);
    }

    #[test]
    fn pcm16_fast_path_equals_hound() {
        // Stereo 16-bit PCM written by hound, full scale at both ends.
        let path = std::env::temp_dir().join(format!("tonus-pcm16-{}.wav", std::process::id()));
        let wav_spec = hound::WavSpec {
            channels: 2,
            sample_rate: 48_000,
            bits_per_sample: 16,
            sample_format: hound::SampleFormat::Int,
        };
        let mut w = hound::WavWriter::create(&path, wav_spec).unwrap();
        for i in 0..4000i32 {
            let v = ((i * 7919) % 65536 - 32768) as i16;
            w.write_sample(v).unwrap();
            w.write_sample(if i % 500 == 0 { i16::MAX } else { -v / 2 })
                .unwrap();
        }
        w.write_sample(i16::MIN).unwrap();
        w.write_sample(0i16).unwrap();
        w.finalize().unwrap();
        let bytes = std::fs::read(&path).unwrap();
        std::fs::remove_file(&path).ok();
        let header = scan_header(&path, &bytes).unwrap();
        assert!(header.pcm && header.bits == 16);
        let fast = decode_pcm16(&bytes, &header);
        let slow = decode_with_hound(&path, &bytes, &header).unwrap();
        assert_eq!(fast, slow);
        assert!(fast.1.iter().filter(|&&h| h).count() >= 9);
    }

    /// Rewrites a RIFF/WAVE file whose chunks are `fmt ` then `data` as RF64
    /// (EBU Tech 3306): a `ds64` chunk first with the 64-bit sizes, the
    /// 32-bit sizes set to 0xFFFFFFFF.
    fn riff_to_rf64(riff: &[u8]) -> Vec<u8> {
        let h = scan_header(Path::new("riff.wav"), riff).unwrap();
        let data_id = h.data_offset - 8;
        let mut b = Vec::new();
        b.extend_from_slice(b"RF64");
        b.extend_from_slice(&u32::MAX.to_le_bytes());
        b.extend_from_slice(b"WAVE");
        b.extend_from_slice(b"ds64");
        b.extend_from_slice(&28u32.to_le_bytes());
        b.extend_from_slice(&((riff.len() + 36 - 8) as u64).to_le_bytes());
        b.extend_from_slice(&(h.data_len as u64).to_le_bytes());
        b.extend_from_slice(&0u64.to_le_bytes()); // sample count (unused here)
        b.extend_from_slice(&0u32.to_le_bytes()); // no table
        b.extend_from_slice(&riff[12..data_id]); // fmt chunk
        b.extend_from_slice(b"data");
        b.extend_from_slice(&u32::MAX.to_le_bytes());
        b.extend_from_slice(&riff[h.data_offset..]);
        b
    }

    #[test]
    fn rf64_reads_as_the_same_wav() {
        let dir = std::env::temp_dir().join(format!("tonus-rf64-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        // 16-bit (the direct decoder) and 24-bit (through hound).
        for bits in [16u16, 24] {
            let wav = dir.join(format!("t{bits}.wav"));
            let x: Vec<f64> = (0..9600)
                .map(|i| 0.5 * (2.0 * std::f64::consts::PI * 440.0 * i as f64 / 48e3).sin())
                .collect();
            write_wav(&wav, &x, 48_000, bits, false).unwrap();
            let riff = std::fs::read(&wav).unwrap();
            let rf = dir.join(format!("t{bits}.rf64.wav"));
            std::fs::write(&rf, riff_to_rf64(&riff)).unwrap();
            let a = read_audio(&wav, ChannelChoice::MixDown).unwrap();
            let b = read_audio(&rf, ChannelChoice::MixDown).unwrap();
            assert_eq!(a.samples, b.samples);
            assert_eq!(b.bits_per_sample, bits);
        }
        let _ = std::fs::remove_dir_all(&dir);
    }

    #[test]
    fn content_decides_the_container() {
        assert_eq!(sniff(b"RIFF\0\0\0\0WAVEfmt "), Container::Wav);
        assert_eq!(sniff(b"RF64\xff\xff\xff\xffWAVEds64"), Container::Rf64);
        assert_eq!(sniff(b"fLaC\0\0\0\x22"), Container::Flac { offset: 0 });
        assert_eq!(sniff(b"FORM\0\0\0\0AIFFCOMM"), Container::Aiff);
        assert_eq!(sniff(b"FORM\0\0\0\0AIFCFVER"), Container::Aiff);
        let mut id3 = b"ID3\x03\x00\x00\x00\x00\x01\x01".to_vec();
        id3.extend_from_slice(&[0u8; 129]);
        id3.extend_from_slice(b"fLaC");
        assert_eq!(sniff(&id3), Container::Flac { offset: 139 });
        for junk in [
            &b""[..],
            b"OggS",
            b"FORM\0\0\0\08SVX",
            b"ID3\x03\0\0\0\0\0\0",
        ] {
            assert!(matches!(sniff(junk), Container::Unknown(_)), "{junk:?}");
        }
    }

    #[test]
    fn truncated_header_is_an_error() {
        let p = Path::new("x.wav");
        assert!(scan_header(p, b"").is_err());
        assert!(scan_header(p, b"RIFF\0\0\0\0WAVE").is_err());
        assert!(scan_header(p, b"hello world, not audio").is_err());
    }
}
