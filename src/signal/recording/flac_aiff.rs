//! FLAC and AIFF/AIFF-C through symphonia, checked against the declared
//! length (and a FLAC stream's MD5).

use crate::base::error::{Result, TonusError};
use std::path::Path;
use symphonia::core::audio::SampleBuffer;
use symphonia::core::codecs::{
    Decoder, DecoderOptions, CODEC_TYPE_PCM_F32BE, CODEC_TYPE_PCM_F32LE, CODEC_TYPE_PCM_F64BE,
    CODEC_TYPE_PCM_F64LE,
};
use symphonia::core::errors::Error as SymError;
use symphonia::core::formats::{FormatOptions, FormatReader};
use symphonia::core::io::MediaSourceStream;

use super::decoded::*;

/// The containers decoded through symphonia.
#[derive(Debug, Clone, Copy)]
pub(super) enum Kind {
    Flac,
    Aiff,
}

impl Kind {
    pub(super) fn name(self) -> &'static str {
        match self {
            Kind::Flac => "FLAC",
            Kind::Aiff => "AIFF",
        }
    }
}

/// Decodes a FLAC or AIFF/AIFF-C file with symphonia. The decoding runs
/// under `catch_unwind`, so that a malformed file that trips a panic in the
/// decoder becomes an error instead of ending the program (or a batch).
pub(super) fn decode_with_symphonia(path: &Path, bytes: Vec<u8>, kind: Kind) -> Result<Decoded> {
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

pub(super) fn decode_symphonia_inner(path: &Path, bytes: Vec<u8>, kind: Kind) -> Result<Decoded> {
    let name = kind.name();
    // The frame count the file declares. symphonia 0.5.5 counts an AIFF
    // file's frames from the SSND chunk's length including its 8-byte
    // offset and block-size fields (4 frames too many at 16-bit mono), so
    // the `COMM` chunk's own count is read here instead.
    let comm_frames = match kind {
        Kind::Flac => None,
        Kind::Aiff => aiff_comm_frames(&bytes),
    };
    let corrupt = |what: String| corrupt_file(path, &what);
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
    let stream = Stream {
        name,
        track_id,
        channels,
        float,
        top,
    };
    read_packets(
        path,
        &stream,
        reader.as_mut(),
        decoder.as_mut(),
        &mut out,
        &mut hits,
    )?;
    let declared = match kind {
        Kind::Flac => params.n_frames.filter(|&n| n > 0),
        Kind::Aiff => comm_frames,
    };
    check_length(path, name, kind, declared, channels, &mut out, &mut hits)?;
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

/// Trims an AIFF stream to the frames its `COMM` chunk declares (past
/// them symphonia may have read the fields of a chunk after SSND as
/// samples), and refuses a stream shorter than it declares.
fn check_length(
    path: &Path,
    name: &str,
    kind: Kind,
    declared: Option<u64>,
    channels: u16,
    out: &mut Vec<f64>,
    hits: &mut Vec<bool>,
) -> Result<()> {
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
    Ok(())
}

/// The error of a FLAC or AIFF file that cannot be read to its end.
fn corrupt_file(path: &Path, what: &str) -> TonusError {
    bad(
        path,
        what,
        "the file is cut or corrupt: copy or export the recording again",
    )
}

/// What the packet loop needs to know of the stream.
struct Stream<'a> {
    name: &'a str,
    track_id: u32,
    channels: u16,
    float: bool,
    /// Full scale of integer samples (float: |x| ≥ 0.999).
    top: f64,
}

/// Decodes every packet of the track, appending the interleaved samples
/// to `out` and whether each is at full scale to `hits`.
fn read_packets(
    path: &Path,
    stream: &Stream<'_>,
    reader: &mut dyn FormatReader,
    decoder: &mut dyn Decoder,
    out: &mut Vec<f64>,
    hits: &mut Vec<bool>,
) -> Result<()> {
    let corrupt = |what: String| corrupt_file(path, &what);
    let &Stream {
        name,
        track_id,
        channels,
        float,
        top,
    } = stream;
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
    Ok(())
}

/// The number of sample frames in an AIFF/AIFF-C file's `COMM` chunk
/// (big-endian IFF chunks: id, 32-bit length, body padded to an even
/// length; `COMM` body: channels i16, frames u32, …), if there is one.
pub(super) fn aiff_comm_frames(b: &[u8]) -> Option<u64> {
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
