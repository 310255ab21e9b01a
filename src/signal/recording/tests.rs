//! Tests of reading and writing recordings.

use super::decoded::*;
use super::read::*;
use super::wav::*;
use super::*;
use std::path::Path;

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
        .map(|i| 0.25 + 0.5 * (2.0 * std::f64::consts::PI * 1000.0 * i as f64 / sr as f64).sin())
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
