//! WAV, FLAC and AIFF files written by an outside tool (SoX 14.4.2), read and
//! analysed by tonus. Each FLAC and AIFF fixture is SoX's conversion of a WAV
//! fixture beside it, and must decode to the same samples.
//!
//! The fixtures live in tests/fixtures/ and are committed; the tests never run
//! sox. tests/fixtures/make_fixtures.sh regenerates them byte for byte (`-R`),
//! and tests/fixtures/README.md lists them. Every tone is a pure sine of 1.0 s,
//! so its true frequency is exactly the one given to `synth`.

use std::path::PathBuf;
use tonus::signal::partials::{analyse, AnalysisConfig, Partial};
use tonus::signal::recording::{read_audio, read_wav, ChannelChoice, Recording, SampleFormat};

/// Tolerance on every frequency, Hz.
const FREQ_TOL_HZ: f64 = 0.02;

fn fixture(name: &str) -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("tests")
        .join("fixtures")
        .join(name)
}

fn read(name: &str, ch: ChannelChoice) -> Recording {
    let p = fixture(name);
    read_wav(&p, ch).unwrap_or_else(|e| panic!("read_wav({}, {ch:?}) failed: {e}", p.display()))
}

fn partials_of(rec: &Recording) -> Vec<Partial> {
    let a = analyse(rec, &AnalysisConfig::default())
        .unwrap_or_else(|e| panic!("analyse({}) failed: {e}", rec.path.display()));
    assert!(
        !a.partials.is_empty(),
        "{}: no partials found",
        rec.path.display()
    );
    a.partials
}

/// Partials sorted by level, strongest first.
fn by_level(mut p: Vec<Partial>) -> Vec<Partial> {
    p.sort_by(|a, b| b.level_db.total_cmp(&a.level_db));
    p
}

fn describe(p: &[Partial]) -> String {
    p.iter()
        .take(8)
        .map(|q| {
            format!(
                "{:.4} Hz @ {:.1} dB (snr {:.1})",
                q.frequency_hz, q.level_db, q.snr_db
            )
        })
        .collect::<Vec<_>>()
        .join("; ")
}

fn rms(x: &[f64]) -> f64 {
    (x.iter().map(|v| v * v).sum::<f64>() / x.len() as f64).sqrt()
}

/// Header facts, scaling and DC removal for a 1.0 s fixture whose true RMS is `want_rms`.
fn check_format(
    rec: &Recording,
    rate: f64,
    channels: u16,
    bits: u16,
    format: SampleFormat,
    want_rms: f64,
) {
    let name = rec.path.display();
    assert_eq!(rec.sample_rate_hz, rate, "{name}: sample rate");
    assert_eq!(rec.channels, channels, "{name}: channels");
    assert_eq!(rec.bits_per_sample, bits, "{name}: bits per sample");
    assert_eq!(rec.sample_format, format, "{name}: sample format");
    assert_eq!(rec.samples.len(), rate as usize, "{name}: 1.0 s of frames");
    let mean = rec.samples.iter().sum::<f64>() / rec.samples.len() as f64;
    assert!(mean.abs() < 1e-12, "{name}: DC not removed (mean {mean:e})");
    // Full scale = 1.0: a wrong divisor (2^31 for 24-bit, no −128 for 8-bit, …) shows here.
    let r = rms(&rec.samples);
    assert!(
        (r / want_rms - 1.0).abs() < 0.01,
        "{name}: RMS {r:.5}, expected {want_rms:.5}"
    );
    assert!(
        rec.clipped_fraction < 1e-3,
        "{name}: clipped fraction {}",
        rec.clipped_fraction
    );
}

/// The strongest partial is `f_true` within FREQ_TOL_HZ.
fn check_strongest(rec: &Recording, f_true: f64) -> Vec<Partial> {
    let p = by_level(partials_of(rec));
    let f = p[0].frequency_hz;
    eprintln!(
        "{}: strongest {f:.5} Hz (error {:+.2e} Hz)",
        rec.path.display(),
        f - f_true
    );
    assert!(
        (f - f_true).abs() <= FREQ_TOL_HZ,
        "{}: strongest partial at {f:.4} Hz, expected {f_true} Hz ± {FREQ_TOL_HZ}; partials: {}",
        rec.path.display(),
        describe(&p)
    );
    p
}

/// The two strongest partials are `f_a` and `f_b` (any order), each within
/// FREQ_TOL_HZ; they have equal true amplitudes, so their levels agree within 3 dB.
fn check_two_strongest(rec: &Recording, f_a: f64, f_b: f64) {
    let p = by_level(partials_of(rec));
    assert!(
        p.len() >= 2,
        "{}: only {}",
        rec.path.display(),
        describe(&p)
    );
    let mut top = [p[0].frequency_hz, p[1].frequency_hz];
    top.sort_by(|a, b| a.total_cmp(b));
    let (lo, hi) = if f_a < f_b { (f_a, f_b) } else { (f_b, f_a) };
    eprintln!(
        "{}: two strongest {:.5} / {:.5} Hz (errors {:+.2e} / {:+.2e} Hz)",
        rec.path.display(),
        top[0],
        top[1],
        top[0] - lo,
        top[1] - hi
    );
    assert!(
        (top[0] - lo).abs() <= FREQ_TOL_HZ && (top[1] - hi).abs() <= FREQ_TOL_HZ,
        "{}: two strongest partials at {:.4} and {:.4} Hz, expected {lo} and {hi} Hz ± {FREQ_TOL_HZ}; partials: {}",
        rec.path.display(),
        top[0],
        top[1],
        describe(&p)
    );
    assert!(
        (p[0].level_db - p[1].level_db).abs() < 3.0,
        "{}: equal-amplitude tones reported {:.2} dB apart; partials: {}",
        rec.path.display(),
        p[0].level_db - p[1].level_db,
        describe(&p)
    );
}

/// No partial near `f` unless at least 60 dB below the strongest (the true level there is −∞).
fn check_absent(rec: &Recording, p: &[Partial], f: f64) {
    let top = p[0].level_db;
    for q in p.iter().filter(|q| (q.frequency_hz - f).abs() < 5.0) {
        assert!(
            q.level_db < top - 60.0,
            "{}: a partial at {:.3} Hz ({:.1} dB) where the channel has no tone; partials: {}",
            rec.path.display(),
            q.frequency_hz,
            q.level_db,
            describe(p)
        );
    }
}

// A pure sine of amplitude 0.5 has RMS 0.5/√2.
const RMS_HALF: f64 = 0.353_553_390_593_273_8;

// sox -R -n -r 48000 -b 16 -c 1 sine_440_48k_s16.wav synth 1.0 sine 440 vol 0.5
// WAVE_FORMAT_PCM (tag 0x0001), 16-bit signed, 48 kHz, mono, 440 Hz, amplitude 0.5.
#[test]
fn s16_48k_mono_440() {
    let rec = read("sine_440_48k_s16.wav", ChannelChoice::MixDown);
    check_format(&rec, 48_000.0, 1, 16, SampleFormat::Pcm, RMS_HALF);
    check_strongest(&rec, 440.0);
}

// sox -R -n -r 44100 -b 24 -c 1 sine_1234p5_44k1_s24.wav synth 1.0 sine 1234.5 vol 0.5
// WAVE_FORMAT_EXTENSIBLE (tag 0xFFFE, sub-format PCM): sox writes it for > 16 bits.
// 24-bit signed, 44.1 kHz, mono, 1234.5 Hz (half-integer: between two 1 Hz FFT bins).
#[test]
fn s24_extensible_44k1_mono_1234p5() {
    let rec = read("sine_1234p5_44k1_s24.wav", ChannelChoice::MixDown);
    check_format(&rec, 44_100.0, 1, 24, SampleFormat::Pcm, RMS_HALF);
    check_strongest(&rec, 1234.5);
}

// sox -R -n -r 48000 -e floating-point -b 32 -c 1 sine_997_48k_f32.wav synth 1.0 sine 997 vol 0.5
// WAVE_FORMAT_IEEE_FLOAT (tag 0x0003, 18-byte fmt, fact chunk), 48 kHz, mono, 997 Hz.
#[test]
fn f32_48k_mono_997() {
    let rec = read("sine_997_48k_f32.wav", ChannelChoice::MixDown);
    check_format(&rec, 48_000.0, 1, 32, SampleFormat::Float, RMS_HALF);
    check_strongest(&rec, 997.0);
}

// sox -R -n -r 8000 -e unsigned-integer -b 8 -c 1 sine_500_8k_u8.wav synth 1.0 sine 500 vol 0.5
// WAVE_FORMAT_PCM, 8-bit UNSIGNED (offset 128), 8 kHz (the lowest rate tonus accepts), 500 Hz.
#[test]
fn u8_8k_mono_500() {
    let rec = read("sine_500_8k_u8.wav", ChannelChoice::MixDown);
    check_format(&rec, 8_000.0, 1, 8, SampleFormat::Pcm, RMS_HALF);
    check_strongest(&rec, 500.0);
}

// sox -R -n -r 44100 -b 16 -c 2 stereo_300L_700R_44k1_s16.wav synth 1.0 sine 300 sine 700 vol 0.5
// WAVE_FORMAT_PCM, 16-bit, 44.1 kHz, stereo: channel 0 (left) 300 Hz, channel 1 (right) 700 Hz,
// each amplitude 0.5.
const STEREO: &str = "stereo_300L_700R_44k1_s16.wav";

#[test]
fn stereo_channel_0_is_300() {
    let rec = read(STEREO, ChannelChoice::Index(0));
    check_format(&rec, 44_100.0, 2, 16, SampleFormat::Pcm, RMS_HALF);
    let p = check_strongest(&rec, 300.0);
    check_absent(&rec, &p, 700.0);
}

#[test]
fn stereo_channel_1_is_700() {
    let rec = read(STEREO, ChannelChoice::Index(1));
    check_format(&rec, 44_100.0, 2, 16, SampleFormat::Pcm, RMS_HALF);
    let p = check_strongest(&rec, 700.0);
    check_absent(&rec, &p, 300.0);
}

#[test]
fn stereo_mixdown_has_both() {
    let rec = read(STEREO, ChannelChoice::MixDown);
    // Average of the channels: two tones of amplitude 0.25, RMS 0.25.
    check_format(&rec, 44_100.0, 2, 16, SampleFormat::Pcm, 0.25);
    check_two_strongest(&rec, 300.0, 700.0);
}

#[test]
fn stereo_channel_out_of_range_is_an_error() {
    let r = read_wav(&fixture(STEREO), ChannelChoice::Index(2));
    assert!(
        r.is_err(),
        "channel index 2 of a stereo file must be refused"
    );
    // Index(0) of a mono file is the file itself.
    let a = read("sine_440_48k_s16.wav", ChannelChoice::Index(0));
    let b = read("sine_440_48k_s16.wav", ChannelChoice::MixDown);
    assert_eq!(a.samples, b.samples);
    assert!(read_wav(&fixture("sine_440_48k_s16.wav"), ChannelChoice::Index(1)).is_err());
}

// sox -R -n -r 44100 -b 16 -c 1 two_tone_220_587p3_44k1_s16.wav synth 1.0 sine 220 synth 1.0 sine mix 587.3 vol 0.8
// WAVE_FORMAT_PCM, 16-bit, 44.1 kHz, mono. `mix` averages the second synth with the
// first, so each tone has amplitude 0.5 · 0.8 = 0.4: RMS √(2 · 0.4²/2) = 0.4.
#[test]
fn two_tone_220_and_587p3() {
    let rec = read("two_tone_220_587p3_44k1_s16.wav", ChannelChoice::MixDown);
    check_format(&rec, 44_100.0, 1, 16, SampleFormat::Pcm, 0.4);
    check_two_strongest(&rec, 220.0, 587.3);
}

/// The frequency error of the partial nearest `f_true`, with and without
/// the damped-sinusoid refinement.
fn errors(rec: &Recording, f_true: f64) -> (f64, f64, Option<f64>) {
    let nearest = |cfg: &AnalysisConfig| {
        let a = analyse(rec, cfg).expect("analysis");
        a.partials
            .into_iter()
            .min_by(|a, b| {
                (a.frequency_hz - f_true)
                    .abs()
                    .total_cmp(&(b.frequency_hz - f_true).abs())
            })
            .expect("a partial")
    };
    let plain = nearest(&AnalysisConfig {
        refine: false,
        ..AnalysisConfig::default()
    });
    let refined = nearest(&AnalysisConfig::default());
    (
        (plain.frequency_hz - f_true).abs(),
        (refined.frequency_hz - f_true).abs(),
        refined.frequency_u_hz,
    )
}

#[test]
fn refinement_is_at_least_as_accurate_as_the_fft_peak() {
    let cases: [(&str, ChannelChoice, f64); 7] = [
        ("sine_440_48k_s16.wav", ChannelChoice::MixDown, 440.0),
        ("sine_1234p5_44k1_s24.wav", ChannelChoice::MixDown, 1234.5),
        ("sine_997_48k_f32.wav", ChannelChoice::MixDown, 997.0),
        ("sine_500_8k_u8.wav", ChannelChoice::MixDown, 500.0),
        (
            "stereo_300L_700R_44k1_s16.wav",
            ChannelChoice::Index(0),
            300.0,
        ),
        (
            "two_tone_220_587p3_44k1_s16.wav",
            ChannelChoice::MixDown,
            220.0,
        ),
        (
            "two_tone_220_587p3_44k1_s16.wav",
            ChannelChoice::MixDown,
            587.3,
        ),
    ];
    for (name, ch, f) in cases {
        let rec = read(name, ch);
        let (fft, refined, u) = errors(&rec, f);
        // "At least as accurate", with 0.1 mHz for rounding in the WAV's
        // own quantisation.
        assert!(
            refined <= fft + 1e-4,
            "{name} at {f} Hz: refined error {refined:.6} Hz, FFT peak {fft:.6} Hz"
        );
        // The stated uncertainty covers the error (k = 3), allowing for
        // the half-LSB quantisation the noise model does not see.
        let u = u.expect("refined partial carries its uncertainty");
        assert!(
            refined <= 3.0 * u + 1e-4,
            "{name} at {f} Hz: error {refined:.6} Hz against u {u:.6} Hz"
        );
    }
}

// ---------------------------------------------------------------------------
// FLAC and AIFF/AIFF-C (SoX conversions of the WAV fixtures; commands in
// make_fixtures.sh and the README there).

/// One LSB of a `bits`-bit integer sample at full scale 1 (float 32: one
/// unit in the last place of a sample near full scale, 2^−23).
fn lsb(bits: u16, format: SampleFormat) -> f64 {
    match format {
        SampleFormat::Pcm => 2f64.powi(1 - bits as i32),
        SampleFormat::Float => 2f64.powi(-23),
    }
}

/// `other` (a FLAC or AIFF file) decodes to the same recording as `wav`:
/// header facts, length, DC offset, clipping, and every sample within one
/// LSB (lossless formats: the samples are in fact identical).
fn check_same_as_wav(wav: &str, other: &str, ch: ChannelChoice) {
    let a = read(wav, ch);
    let p = fixture(other);
    let b = read_audio(&p, ch).unwrap_or_else(|e| panic!("read_audio({other}, {ch:?}): {e}"));
    assert_eq!(b.sample_rate_hz, a.sample_rate_hz, "{other}: sample rate");
    assert_eq!(b.channels, a.channels, "{other}: channels");
    assert_eq!(b.bits_per_sample, a.bits_per_sample, "{other}: bits");
    assert_eq!(b.sample_format, a.sample_format, "{other}: sample format");
    assert_eq!(b.samples.len(), a.samples.len(), "{other}: frames");
    let tol = lsb(a.bits_per_sample, a.sample_format);
    let worst = a
        .samples
        .iter()
        .zip(&b.samples)
        .map(|(x, y)| (x - y).abs())
        .fold(0.0f64, f64::max);
    eprintln!("{other} vs {wav} ({ch:?}): largest difference {worst:e} (1 LSB = {tol:e})");
    assert!(
        worst <= tol,
        "{other}: differs from {wav} by {worst:e}, more than 1 LSB ({tol:e})"
    );
    assert!(
        (a.dc_offset - b.dc_offset).abs() <= tol,
        "{other}: DC offset {} vs {}",
        b.dc_offset,
        a.dc_offset
    );
    assert_eq!(a.clipped_fraction, b.clipped_fraction, "{other}: clipping");
}

// sox -R sine_1234p5_44k1_s24.wav sine_1234p5_44k1_s24.flac
#[test]
fn flac_24bit_equals_wav() {
    check_same_as_wav(
        "sine_1234p5_44k1_s24.wav",
        "sine_1234p5_44k1_s24.flac",
        ChannelChoice::MixDown,
    );
}

// sox -R stereo_300L_700R_44k1_s16.wav stereo_300L_700R_44k1_s16.flac
#[test]
fn flac_stereo_equals_wav_for_each_channel_choice() {
    for ch in [
        ChannelChoice::MixDown,
        ChannelChoice::Index(0),
        ChannelChoice::Index(1),
    ] {
        check_same_as_wav(STEREO, "stereo_300L_700R_44k1_s16.flac", ch);
    }
    let rec = read("stereo_300L_700R_44k1_s16.flac", ChannelChoice::Index(1));
    check_strongest(&rec, 700.0);
    assert!(read_audio(
        &fixture("stereo_300L_700R_44k1_s16.flac"),
        ChannelChoice::Index(2)
    )
    .is_err());
}

// sox -R sine_440_48k_s16.wav sine_440_48k_s16.aiff
#[test]
fn aiff_16bit_equals_wav() {
    check_same_as_wav(
        "sine_440_48k_s16.wav",
        "sine_440_48k_s16.aiff",
        ChannelChoice::MixDown,
    );
}

// sox -R sine_1234p5_44k1_s24.wav sine_1234p5_44k1_s24.aiff
#[test]
fn aiff_24bit_equals_wav() {
    check_same_as_wav(
        "sine_1234p5_44k1_s24.wav",
        "sine_1234p5_44k1_s24.aiff",
        ChannelChoice::MixDown,
    );
}

// sox -R sine_997_48k_f32.wav -e floating-point sine_997_48k_f32.aifc
// (AIFF-C, compression type `fl32`: big-endian IEEE float).
#[test]
fn aifc_float32_equals_wav() {
    check_same_as_wav(
        "sine_997_48k_f32.wav",
        "sine_997_48k_f32.aifc",
        ChannelChoice::MixDown,
    );
    check_strongest(
        &read("sine_997_48k_f32.aifc", ChannelChoice::MixDown),
        997.0,
    );
}

// cp ../../demo-recordings/screen-a.wav tap_screen_a_48k_s16.wav
// sox -R tap_screen_a_48k_s16.wav tap_screen_a_48k_s16.flac
#[test]
fn tap_flac_equals_wav() {
    check_same_as_wav(
        "tap_screen_a_48k_s16.wav",
        "tap_screen_a_48k_s16.flac",
        ChannelChoice::MixDown,
    );
}

/// Screen A's panel (demo-recordings/screen-a.panel.toml) as flags.
const SCREEN_A: [&str; 8] = [
    "--width",
    "500mm",
    "--height",
    "400mm",
    "--areal-density",
    "40g/m2",
    "--tap-at",
    "0.3,0.35",
];

fn tonus(args: &[&str]) -> std::process::Output {
    std::process::Command::new(env!("CARGO_BIN_EXE_tonus"))
        .args(args)
        .output()
        .expect("run tonus")
}

fn fit_json(file: &str) -> serde_json::Value {
    let p = fixture(file);
    let mut args = vec!["fit", p.to_str().unwrap()];
    args.extend_from_slice(&SCREEN_A);
    args.push("--json");
    let o = tonus(&args);
    assert_eq!(
        o.status.code(),
        Some(0),
        "{file}: {}",
        String::from_utf8_lossy(&o.stderr)
    );
    serde_json::from_slice(&o.stdout).unwrap()
}

/// `tonus fit` on the FLAC gives the WAV's tension: the same samples give
/// the same numbers (to rounding in the last digits, 1e-12 relative).
#[test]
fn fit_on_flac_equals_fit_on_wav() {
    let w = fit_json("tap_screen_a_48k_s16.wav");
    let f = fit_json("tap_screen_a_48k_s16.flac");
    let t = |j: &serde_json::Value, k: &str| j["tension"][k].as_f64().unwrap();
    let (tw, tf) = (t(&w, "value"), t(&f, "value"));
    eprintln!("tension: WAV {tw} N/m, FLAC {tf} N/m");
    // The demo screen is stretched to 20 N/cm = 2000 N/m.
    assert!((tw - 2000.0).abs() < 5.0, "WAV tension {tw}");
    assert!((tf / tw - 1.0).abs() < 1e-12, "FLAC {tf} vs WAV {tw}");
    let (uw, uf) = (t(&w, "standard_uncertainty"), t(&f, "standard_uncertainty"));
    assert!((uf / uw - 1.0).abs() < 1e-9, "u: FLAC {uf} vs WAV {uw}");
    assert_eq!(
        w["modes"].as_array().unwrap().len(),
        f["modes"].as_array().unwrap().len()
    );
    assert_eq!(w["quality"]["grade"], f["quality"]["grade"]);
}

/// A one-line error with exit status 2 and no panic, holding `needle`.
fn expect_one_line_error(args: &[&str], needle: &str) {
    let o = tonus(args);
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(2), "{args:?}: {err}");
    assert!(!err.contains("panicked"), "{err}");
    assert_eq!(err.trim_end().lines().count(), 1, "one line: {err}");
    assert!(
        err.contains(needle),
        "{args:?}: expected '{needle}' in {err}"
    );
}

fn fit_args(p: &std::path::Path) -> Vec<&str> {
    let mut args = vec!["fit", p.to_str().unwrap()];
    args.extend_from_slice(&SCREEN_A);
    args
}

/// A FLAC file cut anywhere after its header is refused (its STREAMINFO
/// declares 72 000 frames), never read as a shorter recording; cut inside
/// the header, it is refused too.
#[test]
fn truncated_flac_is_a_one_line_error() {
    let dir = tempfile::tempdir().unwrap();
    let whole = std::fs::read(fixture("tap_screen_a_48k_s16.flac")).unwrap();
    for keep in [whole.len() * 3 / 5, whole.len() - 1, 40] {
        let p = dir.path().join(format!("cut{keep}.flac"));
        std::fs::write(&p, &whole[..keep]).unwrap();
        let needle = if keep > 1000 {
            "declares 72000 frames"
        } else {
            "FLAC header cannot be read"
        };
        expect_one_line_error(&fit_args(&p), needle);
        assert!(read_audio(&p, ChannelChoice::MixDown).is_err());
    }
}

/// A FLAC file with one byte of its audio changed is refused (the frame's
/// CRC or the stream's MD5 signature), never analysed.
#[test]
fn corrupt_flac_is_a_one_line_error() {
    let dir = tempfile::tempdir().unwrap();
    let mut b = std::fs::read(fixture("tap_screen_a_48k_s16.flac")).unwrap();
    let mid = b.len() / 2;
    b[mid] ^= 0x5a;
    let p = dir.path().join("corrupt.flac");
    std::fs::write(&p, &b).unwrap();
    expect_one_line_error(&fit_args(&p), "copy or export the recording again");
}

/// An AIFF file cut in its sound data is refused against its COMM chunk's
/// frame count.
#[test]
fn truncated_aiff_is_a_one_line_error() {
    let dir = tempfile::tempdir().unwrap();
    let whole = std::fs::read(fixture("sine_440_48k_s16.aiff")).unwrap();
    let p = dir.path().join("cut.aiff");
    std::fs::write(&p, &whole[..whole.len() / 2]).unwrap();
    expect_one_line_error(&["partials", p.to_str().unwrap()], "declares 48000 frames");
}

/// The format is told by the content: a FLAC named `.wav` reads as FLAC, a
/// FLAC after an ID3v2 tag reads, and content of no known kind is refused
/// with the bytes found and the formats read.
#[test]
fn format_is_told_by_content() {
    let dir = tempfile::tempdir().unwrap();
    let flac = std::fs::read(fixture("sine_1234p5_44k1_s24.flac")).unwrap();
    let want = read("sine_1234p5_44k1_s24.wav", ChannelChoice::MixDown);

    let misnamed = dir.path().join("really-flac.wav");
    std::fs::write(&misnamed, &flac).unwrap();
    let r = read_audio(&misnamed, ChannelChoice::MixDown).unwrap();
    assert_eq!(r.samples, want.samples);

    // ID3v2.4 header with a 20-byte tag body (syncsafe size 0 0 0 20).
    let mut tagged = b"ID3\x04\x00\x00\x00\x00\x00\x14".to_vec();
    tagged.extend_from_slice(&[0u8; 20]);
    tagged.extend_from_slice(&flac);
    let p = dir.path().join("tagged.flac");
    std::fs::write(&p, &tagged).unwrap();
    let r = read_audio(&p, ChannelChoice::MixDown).unwrap();
    assert_eq!(r.samples, want.samples);

    let ogg = dir.path().join("tap.ogg");
    std::fs::write(&ogg, b"OggS\x00\x02 not audio tonus reads").unwrap();
    expect_one_line_error(&["partials", ogg.to_str().unwrap()], "\"OggS");
    expect_one_line_error(
        &["partials", ogg.to_str().unwrap()],
        "tonus reads WAV (RIFF or RF64: PCM or float), FLAC and AIFF/AIFF-C",
    );
}

/// `inspect`'s folder scan takes `.flac`, `.aif`, `.aiff` and `.aifc` files
/// beside `.wav` ones.
#[test]
fn folder_scan_takes_flac_and_aiff() {
    let files = tonus::app::batch::expand_inputs(&[fixture("")]).unwrap();
    let names: Vec<String> = files
        .iter()
        .map(|p| p.file_name().unwrap().to_string_lossy().into_owned())
        .collect();
    for want in [
        "sine_440_48k_s16.wav",
        "tap_screen_a_48k_s16.flac",
        "sine_440_48k_s16.aiff",
        "sine_997_48k_f32.aifc",
    ] {
        assert!(names.iter().any(|n| n == want), "{want} not in {names:?}");
    }
    assert!(!names
        .iter()
        .any(|n| n.ends_with(".sh") || n.ends_with(".md")));
}
