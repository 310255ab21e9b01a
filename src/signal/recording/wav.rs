//! WAV and RF64: hound for what it reads, 16-bit PCM and 64-bit float
//! from the RIFF chunks here.

use crate::base::error::Result;
use std::path::Path;

use super::decoded::*;

/// Decodes a RIFF/WAVE file (also one rewritten from RF64).
pub(super) fn decode_wav(path: &Path, bytes: &[u8]) -> Result<Decoded> {
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

/// Rewrites an RF64 header in memory into the RIFF header it stands for
/// (EBU Tech 3306): `RF64` becomes `RIFF` with the file's length, the
/// `ds64` chunk (which must come first) becomes a `JUNK` chunk, and a data
/// chunk whose 32-bit size is the placeholder 0xFFFFFFFF gets the 64-bit
/// size from `ds64`. The WAV reader then takes it as it is.
pub(super) fn rf64_to_riff(path: &Path, b: &mut [u8]) -> Result<()> {
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

/// What the RIFF header says, read before decoding.
#[derive(Debug)]
pub(super) struct Header {
    pub(super) channels: u16,
    pub(super) sample_rate: u32,
    pub(super) bits: u16,
    pub(super) float: bool,
    /// Integer PCM (format tag 1, or extensible with the PCM subformat).
    pub(super) pcm: bool,
    pub(super) block_align: u16,
    pub(super) data_offset: usize,
    pub(super) data_len: usize,
}

/// Walks the RIFF chunks far enough to know the format and to find a
/// truncated data chunk before any decoder does.
pub(super) fn scan_header(path: &Path, b: &[u8]) -> Result<Header> {
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
pub(super) fn decode_with_hound(
    path: &Path,
    bytes: &[u8],
    header: &Header,
) -> Result<(Vec<f64>, Vec<bool>)> {
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
pub(super) fn decode_pcm16(bytes: &[u8], header: &Header) -> (Vec<f64>, Vec<bool>) {
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
pub(super) fn decode_f64(
    path: &Path,
    bytes: &[u8],
    header: &Header,
) -> Result<(Vec<f64>, Vec<bool>)> {
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
