//! Live input: audio read as a continuous stream (standard input from a
//! sound-card recorder), and the causal tap finder that cuts a stream —
//! or a whole file, fed to it the same way — into taps.
//!
//! Conventions: samples in full-scale units (1 = full scale), channels
//! averaged to one (as [`crate::signal::recording`] mixes a file by default);
//! frames of [`FRAME_S`] on the signal through a DC blocker
//! ([`HIGH_PASS_HZ`]), hop half a frame; levels in dB re full scale (mean
//! square).
//!
//! # Stream formats
//!
//! Either a WAV header stream (RIFF `fmt ` chunk with PCM 8/16/24/32-bit
//! or 32/64-bit float, then a `data` chunk whose length is ignored, since
//! a recorder writing to a pipe cannot know it), or headerless PCM whose
//! rate, channel count and sample format ([`PcmFormat`]) are given. Only
//! little-endian data are read.
//!
//! # Tap finder
//!
//! [`TapFinder`] sees each frame once, in order, and never looks ahead, so
//! the onsets it reports do not depend on how the stream was chunked: the
//! live bench and a file fed to it whole find the same taps. A frame is an
//! onset when its energy rises [`RISE_DB`] over the loudest frame of the
//! preceding [`LOOKBACK_S`] (a decaying tap does not re-trigger it) and
//! stands [`ABOVE_FLOOR_DB`] over the floor, the quietest frame of the last
//! [`FLOOR_S`]; after an onset the finder rests for [`REST_S`] (a bounce of
//! the stick is part of its tap). The onset is placed [`LEAD_FRAMES`]
//! frames early, so the cut holds the whole attack.

use crate::base::error::{Result, TonusError};
use std::collections::VecDeque;
use std::io::Read;
use std::path::PathBuf;

/// Corner of the one-pole DC blocker in front of the tap finder, Hz: low
/// enough to keep a drum's fundamental (a first difference alone would
/// weaken a 100 Hz tap by 34 dB at 48 kHz and lose soft taps in the
/// noise), high enough to take away DC and rumble.
pub const HIGH_PASS_HZ: f64 = 40.0;
/// Frame length of the tap finder, s.
pub const FRAME_S: f64 = 0.004;
/// Rise over the loudest frame of the look-back that marks an onset, dB.
pub const RISE_DB: f64 = 15.0;
/// Look-back for the rise, s.
pub const LOOKBACK_S: f64 = 0.05;
/// Least height of an onset over the floor, dB.
pub const ABOVE_FLOOR_DB: f64 = 20.0;
/// Span over which the floor is the quietest frame, s.
pub const FLOOR_S: f64 = 3.0;
/// Rest after an onset, s.
pub const REST_S: f64 = 0.25;
/// Frames the onset is placed before the triggering frame.
pub const LEAD_FRAMES: usize = 2;

/// Sample format of headerless PCM.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SampleKind {
    /// Signed 16-bit little-endian.
    S16,
    /// Signed 24-bit little-endian, packed in 3 bytes.
    S24,
    /// Signed 32-bit little-endian.
    S32,
    /// 32-bit float little-endian.
    F32,
}

impl SampleKind {
    /// Reads a format name: s16, s24, s32 or f32 (an `le` suffix, as
    /// recorders write it, e.g. S16_LE, is accepted).
    ///
    /// # Errors
    /// Any other name.
    pub fn parse(key: &str, s: &str) -> Result<SampleKind> {
        let t = s.to_ascii_lowercase().replace(['_', '-'], "");
        match t.trim_end_matches("le") {
            "s16" => Ok(SampleKind::S16),
            "s24" | "s243" => Ok(SampleKind::S24),
            "s32" => Ok(SampleKind::S32),
            "f32" | "float" => Ok(SampleKind::F32),
            _ => Err(TonusError::BadQuantity {
                key: key.into(),
                value: s.into(),
                expected: "a little-endian sample format: s16, s24 (3 bytes), s32 or f32".into(),
                example: "s16 (arecord -f S16_LE)".into(),
            }),
        }
    }

    fn bytes(self) -> usize {
        match self {
            SampleKind::S16 => 2,
            SampleKind::S24 => 3,
            SampleKind::S32 | SampleKind::F32 => 4,
        }
    }
}

/// Headerless PCM layout.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PcmFormat {
    /// Samples per second per channel.
    pub rate_hz: u32,
    /// Interleaved channels.
    pub channels: u16,
    /// Sample format.
    pub kind: SampleKind,
}

/// The layout of the stream's samples once its header (if any) is read.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Layout {
    Int { bytes: usize },
    Float { bytes: usize },
    U8,
}

/// A stream of audio read from any byte source, mixed to one channel.
pub struct AudioStream<R: Read> {
    source: R,
    /// Sample rate, Hz.
    pub rate_hz: u32,
    channels: usize,
    layout: Layout,
    pending: Vec<u8>,
    name: PathBuf,
    ended: bool,
}

fn bad(name: &std::path::Path, problem: String, hint: &str) -> TonusError {
    TonusError::BadRecording {
        path: name.to_path_buf(),
        problem,
        hint: hint.into(),
    }
}

/// Reads exactly `n` bytes, or fewer at the end of the stream.
fn read_up_to<R: Read>(r: &mut R, n: usize) -> std::io::Result<Vec<u8>> {
    let mut buf = vec![0u8; n];
    let mut got = 0;
    while got < n {
        match r.read(&mut buf[got..]) {
            Ok(0) => break,
            Ok(k) => got += k,
            Err(e) if e.kind() == std::io::ErrorKind::Interrupted => continue,
            Err(e) => return Err(e),
        }
    }
    buf.truncate(got);
    Ok(buf)
}

impl<R: Read> AudioStream<R> {
    /// Opens a stream: with `pcm` None the source must begin with a WAV
    /// header, which is read here (up to the start of the `data` chunk).
    ///
    /// # Errors
    /// A source that is neither a WAV header stream nor described by
    /// `pcm`, an unsupported encoding, a rate outside 8–192 kHz.
    pub fn open(mut source: R, pcm: Option<PcmFormat>, name: PathBuf) -> Result<Self> {
        let io = |e: std::io::Error| TonusError::Io {
            path: name.clone(),
            reason: e.to_string(),
        };
        let hint_raw = "pipe a WAV stream (arecord -t wav) or give the raw layout with --pcm-rate, --pcm-channels and --pcm-format";
        let (rate, channels, layout) = match pcm {
            Some(p) => {
                let layout = match p.kind {
                    SampleKind::F32 => Layout::Float { bytes: 4 },
                    k => Layout::Int { bytes: k.bytes() },
                };
                (p.rate_hz, p.channels as usize, layout)
            }
            None => {
                let head = read_up_to(&mut source, 12).map_err(io)?;
                if head.len() < 12 || &head[0..4] != b"RIFF" || &head[8..12] != b"WAVE" {
                    return Err(bad(
                        &name,
                        format!(
                            "the stream does not begin with a WAV header (first bytes {:02x?})",
                            &head[..head.len().min(8)]
                        ),
                        hint_raw,
                    ));
                }
                let mut fmt: Option<(u16, u16, u32, u16)> = None;
                loop {
                    let ch = read_up_to(&mut source, 8).map_err(io)?;
                    if ch.len() < 8 {
                        return Err(bad(
                            &name,
                            "the WAV header ends before its data chunk".into(),
                            hint_raw,
                        ));
                    }
                    let size = u32::from_le_bytes([ch[4], ch[5], ch[6], ch[7]]) as usize;
                    if &ch[0..4] == b"data" {
                        break;
                    }
                    if size > 1 << 20 {
                        return Err(bad(
                            &name,
                            format!("a {size}-byte header chunk before the audio"),
                            hint_raw,
                        ));
                    }
                    let body = read_up_to(&mut source, size + (size & 1)).map_err(io)?;
                    if &ch[0..4] == b"fmt " && body.len() >= 16 {
                        let tag = u16::from_le_bytes([body[0], body[1]]);
                        let chans = u16::from_le_bytes([body[2], body[3]]);
                        let rate = u32::from_le_bytes([body[4], body[5], body[6], body[7]]);
                        let bits = u16::from_le_bytes([body[14], body[15]]);
                        // WAVE_FORMAT_EXTENSIBLE: the sub-format's first two bytes.
                        let tag = if tag == 0xFFFE && body.len() >= 26 {
                            u16::from_le_bytes([body[24], body[25]])
                        } else {
                            tag
                        };
                        fmt = Some((tag, chans, rate, bits));
                    }
                }
                let Some((tag, chans, rate, bits)) = fmt else {
                    return Err(bad(
                        &name,
                        "the WAV header has no fmt chunk".into(),
                        hint_raw,
                    ));
                };
                let layout = match (tag, bits) {
                    (1, 8) => Layout::U8,
                    (1, 16 | 24 | 32) => Layout::Int {
                        bytes: bits as usize / 8,
                    },
                    (3, 32 | 64) => Layout::Float {
                        bytes: bits as usize / 8,
                    },
                    _ => {
                        return Err(bad(
                            &name,
                            format!(
                                "WAV encoding {tag} with {bits} bits is not read from a stream"
                            ),
                            "record PCM 16/24/32-bit or 32-bit float (arecord -f S16_LE)",
                        ))
                    }
                };
                (rate, chans as usize, layout)
            }
        };
        if !(8000..=192_000).contains(&rate) {
            return Err(TonusError::OutOfRange {
                key: "sample rate".into(),
                value: format!("{rate} Hz"),
                why: "tonus reads 8000 to 192000 Hz".into(),
            });
        }
        if channels == 0 || channels > 64 {
            return Err(TonusError::OutOfRange {
                key: "channels".into(),
                value: channels.to_string(),
                why: "give 1 to 64 channels".into(),
            });
        }
        Ok(AudioStream {
            source,
            rate_hz: rate,
            channels,
            layout,
            pending: Vec::new(),
            name,
            ended: false,
        })
    }

    /// Reads what the source has (blocking until some bytes arrive) and
    /// returns it as mono samples; None at the end of the stream. A frame
    /// cut by the end of the stream is dropped.
    ///
    /// # Errors
    /// A read error of the source.
    pub fn next_chunk(&mut self) -> Result<Option<Vec<f64>>> {
        if self.ended {
            return Ok(None);
        }
        let mut buf = [0u8; 16384];
        let k = match self.source.read(&mut buf) {
            Ok(k) => k,
            // A signal arrived: hand back control so the caller can look
            // at its stop flag.
            Err(e) if e.kind() == std::io::ErrorKind::Interrupted => return Ok(Some(Vec::new())),
            Err(e) => {
                return Err(TonusError::Io {
                    path: self.name.clone(),
                    reason: e.to_string(),
                })
            }
        };
        if k == 0 {
            self.ended = true;
            return Ok(None);
        }
        self.pending.extend_from_slice(&buf[..k]);
        let width = match self.layout {
            Layout::U8 => 1,
            Layout::Int { bytes } | Layout::Float { bytes } => bytes,
        };
        let frame = width * self.channels;
        let whole = self.pending.len() / frame * frame;
        let mut out = Vec::with_capacity(whole / frame);
        for f in self.pending[..whole].chunks_exact(frame) {
            let mut sum = 0.0;
            for s in f.chunks_exact(width) {
                sum += match self.layout {
                    Layout::U8 => (s[0] as f64 - 128.0) / 128.0,
                    Layout::Int { bytes } => {
                        let mut v: i64 = 0;
                        for (i, b) in s.iter().enumerate() {
                            v |= (*b as i64) << (8 * i);
                        }
                        let shift = 64 - 8 * bytes;
                        ((v << shift) >> shift) as f64 / (1i64 << (8 * bytes - 1)) as f64
                    }
                    Layout::Float { bytes: 4 } => {
                        f32::from_le_bytes([s[0], s[1], s[2], s[3]]) as f64
                    }
                    Layout::Float { .. } => {
                        f64::from_le_bytes([s[0], s[1], s[2], s[3], s[4], s[5], s[6], s[7]])
                    }
                };
            }
            out.push(sum / self.channels as f64);
        }
        self.pending.drain(..whole);
        Ok(Some(out))
    }
}

/// The causal tap finder (see the module notes).
#[derive(Debug, Clone)]
pub struct TapFinder {
    hop: usize,
    frame: usize,
    /// Squared first differences not yet in a complete hop.
    partial: Vec<f64>,
    /// Sums of squared differences of the last hops (one frame's worth).
    hops: VecDeque<f64>,
    /// Hops completed since the start of the stream.
    hop_count: usize,
    /// Energies (dB) of the recent frames with their index.
    recent: VecDeque<(usize, f64)>,
    floor: VecDeque<(usize, f64)>,
    last: Option<f64>,
    /// Last output of the DC blocker and its pole.
    y: f64,
    pole: f64,
    rest_until: usize,
    lookback: usize,
    floor_frames: usize,
    rest_frames: usize,
}

impl TapFinder {
    /// A finder for a stream at `rate_hz`.
    pub fn new(rate_hz: f64) -> Self {
        let frame = ((FRAME_S * rate_hz).round() as usize).max(8) & !1;
        let hop = frame / 2;
        TapFinder {
            hop,
            frame,
            partial: Vec::with_capacity(hop),
            hops: VecDeque::new(),
            hop_count: 0,
            recent: VecDeque::new(),
            floor: VecDeque::new(),
            last: None,
            y: 0.0,
            pole: (-2.0 * std::f64::consts::PI * HIGH_PASS_HZ / rate_hz).exp(),
            rest_until: 0,
            lookback: ((LOOKBACK_S * rate_hz) as usize / hop).max(2),
            floor_frames: ((FLOOR_S * rate_hz) as usize / hop).max(4),
            rest_frames: (REST_S * rate_hz) as usize / hop,
        }
    }

    /// Samples the finder needs after an onset's sample before it could
    /// have reported it (the frame that triggers plus the lead).
    pub fn delay_samples(&self) -> usize {
        self.frame + (LEAD_FRAMES + 1) * self.hop
    }

    /// Feeds samples in order; returns the onsets (sample indices from the
    /// start of the stream) found in them.
    pub fn feed(&mut self, samples: &[f64]) -> Vec<usize> {
        let mut onsets = Vec::new();
        for &x in samples {
            // DC blocker: y[n] = x[n] − x[n−1] + R·y[n−1].
            let d = self.last.map(|l| x - l).unwrap_or(0.0) + self.pole * self.y;
            self.y = d;
            self.last = Some(x);
            self.partial.push(d * d);
            if self.partial.len() < self.hop {
                continue;
            }
            self.hops.push_back(self.partial.iter().sum());
            self.partial.clear();
            self.hop_count += 1;
            let per = self.frame / self.hop;
            if self.hops.len() > per {
                self.hops.pop_front();
            }
            if self.hops.len() < per {
                continue;
            }
            // Frame j starts at hop j and covers `per` hops.
            let j = self.hop_count - per;
            let e = self.hops.iter().sum::<f64>() / self.frame as f64;
            let db = 10.0 * (e + 1e-20).log10();
            // Floor: the quietest frame of the last FLOOR_S (monotone
            // queue of rising energies).
            while self.floor.back().is_some_and(|&(_, v)| v >= db) {
                self.floor.pop_back();
            }
            self.floor.push_back((j, db));
            while self
                .floor
                .front()
                .is_some_and(|&(k, _)| k + self.floor_frames < j)
            {
                self.floor.pop_front();
            }
            let floor = self.floor.front().map(|f| f.1).unwrap_or(db);
            let prev_max = self
                .recent
                .iter()
                .map(|r| r.1)
                .fold(f64::NEG_INFINITY, f64::max);
            if self.recent.len() >= self.lookback
                && j >= self.rest_until
                && db > prev_max + RISE_DB
                && db > floor + ABOVE_FLOOR_DB
            {
                onsets.push(j.saturating_sub(LEAD_FRAMES) * self.hop);
                self.rest_until = j + self.rest_frames;
            }
            self.recent.push_back((j, db));
            while self.recent.len() > self.lookback {
                self.recent.pop_front();
            }
        }
        onsets
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn taps(sr: f64, at_s: &[f64], len_s: f64) -> Vec<f64> {
        let n = (len_s * sr) as usize;
        // Uniform noise from a small linear congruential generator (the
        // synthesiser's generator lives in a layer above this one).
        let mut state: u64 = 3;
        let mut x: Vec<f64> = (0..n)
            .map(|_| {
                state = state
                    .wrapping_mul(6_364_136_223_846_793_005)
                    .wrapping_add(1_442_695_040_888_963_407);
                1e-4 * ((state >> 11) as f64 / (1u64 << 53) as f64 - 0.5)
            })
            .collect();
        for &t in at_s {
            let o = (t * sr) as usize;
            for (k, v) in x[o..].iter_mut().enumerate() {
                let tt = k as f64 / sr;
                *v += 0.5 * (-tt / 0.15).exp() * (2.0 * std::f64::consts::PI * 300.0 * tt).sin()
                    + if k < 20 { 0.3 } else { 0.0 };
            }
        }
        x
    }

    /// The same onsets whether the signal comes whole or in odd chunks,
    /// each within a few milliseconds before the true onset.
    #[test]
    fn onsets_do_not_depend_on_chunking() {
        let sr = 48_000.0;
        let at = [0.3, 1.3, 2.1, 3.4];
        let x = taps(sr, &at, 4.5);
        let whole = TapFinder::new(sr).feed(&x);
        let mut f = TapFinder::new(sr);
        let mut pieces = Vec::new();
        for c in x.chunks(977) {
            pieces.extend(f.feed(c));
        }
        assert_eq!(whole, pieces);
        assert_eq!(whole.len(), at.len(), "{whole:?}");
        for (o, t) in whole.iter().zip(at) {
            let lead = t * sr - *o as f64;
            assert!((0.0..=0.015 * sr).contains(&lead), "{o} for {t}");
        }
    }

    #[test]
    fn wav_header_stream_and_raw_pcm_read_alike() {
        let samples: Vec<i16> = (0..1000).map(|i| ((i * 37) % 2000 - 1000) as i16).collect();
        let mut raw = Vec::new();
        for s in &samples {
            raw.extend_from_slice(&s.to_le_bytes());
        }
        let mut wav = Vec::new();
        wav.extend_from_slice(b"RIFF\xff\xff\xff\xffWAVEfmt ");
        wav.extend_from_slice(&16u32.to_le_bytes());
        wav.extend_from_slice(&1u16.to_le_bytes());
        wav.extend_from_slice(&1u16.to_le_bytes());
        wav.extend_from_slice(&8000u32.to_le_bytes());
        wav.extend_from_slice(&16000u32.to_le_bytes());
        wav.extend_from_slice(&2u16.to_le_bytes());
        wav.extend_from_slice(&16u16.to_le_bytes());
        wav.extend_from_slice(b"data\xff\xff\xff\x7f");
        wav.extend_from_slice(&raw);
        let read_all = |mut s: AudioStream<&[u8]>| {
            let mut out = Vec::new();
            while let Some(c) = s.next_chunk().unwrap() {
                out.extend(c);
            }
            out
        };
        let a = read_all(AudioStream::open(&wav[..], None, "wav".into()).unwrap());
        let pcm = PcmFormat {
            rate_hz: 8000,
            channels: 1,
            kind: SampleKind::S16,
        };
        let b = read_all(AudioStream::open(&raw[..], Some(pcm), "raw".into()).unwrap());
        assert_eq!(a, b);
        assert_eq!(a.len(), 1000);
        assert!((a[1] - 37.0f64.mul_add(1.0, -1000.0) / 32768.0).abs() < 1e-12);
        let e = AudioStream::open(&raw[..], None, "noise".into())
            .err()
            .unwrap();
        assert!(
            e.to_string().contains("does not begin with a WAV header"),
            "{e}"
        );
    }
}
