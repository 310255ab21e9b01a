//! Tests of the spectrum picture.

use super::model::*;
use super::write::*;
use crate::base::error::TonusError;

/// Small deterministic generator (64-bit LCG, Knuth's MMIX constants) for
/// reproducible noise without a dependency.
struct Lcg(u64);
impl Lcg {
    fn uniform(&mut self) -> f64 {
        self.0 = self
            .0
            .wrapping_mul(6_364_136_223_846_793_005)
            .wrapping_add(1_442_695_040_888_963_407);
        (self.0 >> 11) as f64 / (1u64 << 53) as f64
    }
}

/// Power of a Lorentzian line of peak power `peak` (linear), centre `f0`
/// and half width at half maximum `gamma`, at frequency `f` (all Hz).
fn lorentzian(f: f64, f0: f64, gamma: f64, peak: f64) -> f64 {
    let u = (f - f0) / gamma;
    peak / (1.0 + u * u)
}

/// A plausible picture: rectangle 400×300 mm, wave speed 50 m/s, so
/// f_mn = (c/2)·√((m/Lx)² + (n/Ly)²) (Morse & Ingard, Theoretical
/// Acoustics, ch. 5); every mode up to 600 Hz is a predicted line, the
/// first ones are matched by Lorentzian peaks over a -90 dB floor with
/// noise, plus two stray peaks and 50 Hz hum.
fn synthetic_plot(bins: usize) -> SpectrumPlot {
    let (lx, ly, c, max_f) = (0.400, 0.300, 50.0, 600.0);
    let mut rng = Lcg(0x5EED);
    let mut modes: Vec<(f64, u32, u32)> = Vec::new();
    for m in 1..12 {
        for n in 1..12 {
            let f = c / 2.0 * ((m as f64 / lx).powi(2) + (n as f64 / ly).powi(2)).sqrt();
            if f <= max_f {
                modes.push((f, m, n));
            }
        }
    }
    modes.sort_by(|a, b| a.0.total_cmp(&b.0));
    let mut lines = Vec::new();
    let mut peaks: Vec<(f64, f64)> = Vec::new(); // (frequency Hz, peak power)
    let mut partials = Vec::new();
    for (k, &(f, m, n)) in modes.iter().enumerate() {
        let weak = m % 2 == 0 && n % 2 == 0;
        let matched = k < 14 && !weak;
        let residual =
            matched.then(|| 6.0 * (rng.uniform() - 0.5) + if k == 3 { 7.0 } else { 0.0 });
        if let Some(r) = residual {
            let f_meas = f * 2f64.powf(r / 1200.0);
            let level_db = -12.0 - 2.5 * k as f64;
            peaks.push((f_meas, 10f64.powf(level_db / 10.0)));
            partials.push(PlotPartial {
                frequency_hz: f_meas,
                level_db,
                matched: true,
                t60_s: Some(1.2 * (modes[0].0 / f).sqrt()),
                pair: (k == 2).then_some((
                    0.4,
                    1.1 * (modes[0].0 / f).sqrt(),
                    0.9 * (modes[0].0 / f).sqrt(),
                )),
            });
        }
        lines.push(PlotLine {
            frequency_hz: f,
            label: format!("({m},{n})"),
            matched,
            residual_cents: residual,
            expected_weak: weak,
        });
    }
    for (f, level_db) in [(333.0, -48.0), (471.5, -55.0)] {
        peaks.push((f, 10f64.powf(level_db / 10.0)));
        partials.push(PlotPartial {
            frequency_hz: f,
            level_db,
            matched: false,
            t60_s: Some(0.3),
            pair: None,
        });
    }
    for f in [50.0, 150.0] {
        peaks.push((f, 10f64.powf(-62.0 / 10.0)));
    }
    let df = 2000.0 / bins as f64;
    let freqs_hz: Vec<f64> = (0..bins).map(|i| i as f64 * df).collect();
    let floor_power = 10f64.powf(-90.0 / 10.0);
    let level_db = freqs_hz
        .iter()
        .map(|&f| {
            // Exponentially distributed noise power: the periodogram of white noise.
            let noise = -floor_power * (1.0 - rng.uniform()).ln();
            let p: f64 = peaks
                .iter()
                .map(|&(f0, a)| lorentzian(f, f0, 0.05, a))
                .sum();
            10.0 * (noise + p).log10()
        })
        .collect();
    SpectrumPlot {
        title: "panel-a.wav — rectangle 400×300 mm".into(),
        subtitle: "T = 2513 ± 9 N/m · rms residual 1.8 cents · quality: sound".into(),
        floor_db: vec![-90.0; bins],
        freqs_hz,
        level_db,
        partials,
        lines,
        hum_hz: vec![50.0, 150.0],
        max_frequency_hz: max_f,
    }
}

/// Checks the PNG signature (PNG spec, 5.2), then returns width and
/// height from the IHDR chunk as read by the `png` decoder, after
/// checking it is 8-bit RGB.
fn png_size(bytes: &[u8]) -> (u32, u32) {
    assert!(bytes.len() > 8, "file too short for a PNG signature");
    assert_eq!(
        &bytes[..8],
        &[0x89, b'P', b'N', b'G', 0x0D, 0x0A, 0x1A, 0x0A]
    );
    let reader = ::png::Decoder::new(bytes)
        .read_info()
        .expect("PNG header decodes");
    let info = reader.info();
    assert_eq!(info.color_type, ::png::ColorType::Rgb);
    assert_eq!(info.bit_depth, ::png::BitDepth::Eight);
    (info.width, info.height)
}

#[test]
fn writes_png_of_the_right_size_and_leaves_no_part_file() {
    let dir = tempfile::tempdir().expect("temp dir");
    let path = dir.path().join("spectrum.png");
    write_png(&path, &synthetic_plot(100_000)).expect("png written");
    let bytes = std::fs::read(&path).expect("png readable");
    assert_eq!(png_size(&bytes), (WIDTH_PX, HEIGHT_PX));
    assert_eq!(&bytes[bytes.len() - 8..bytes.len() - 4], b"IEND");
    assert!(!crate::base::files::temp_path(&path).exists());
    let names: Vec<_> = std::fs::read_dir(dir.path())
        .expect("list dir")
        .map(|e| e.expect("entry").file_name())
        .collect();
    assert_eq!(names, vec![std::ffi::OsString::from("spectrum.png")]);
}

#[test]
fn empty_plot_still_renders() {
    // Nothing fitted: no bins, no lines, no partials. The picture must
    // still be written (axes, header, "no matched mode lines").
    let dir = tempfile::tempdir().expect("temp dir");
    let path = dir.path().join("empty.png");
    let plot = SpectrumPlot {
        title: "empty".into(),
        subtitle: String::new(),
        freqs_hz: Vec::new(),
        level_db: Vec::new(),
        floor_db: Vec::new(),
        partials: Vec::new(),
        lines: Vec::new(),
        hum_hz: Vec::new(),
        max_frequency_hz: 1000.0,
    };
    write_png(&path, &plot).expect("png written");
    let bytes = std::fs::read(&path).expect("png readable");
    assert_eq!(png_size(&bytes), (WIDTH_PX, HEIGHT_PX));
}

#[test]
fn unwritable_path_is_a_write_error_without_part_file() {
    let dir = tempfile::tempdir().expect("temp dir");
    let path = dir.path().join("missing-dir").join("spectrum.png");
    let err = write_png(&path, &synthetic_plot(2_000)).expect_err("must fail");
    assert!(
        matches!(err, TonusError::Write { path: ref p, .. } if p == &path),
        "{err}"
    );
    assert!(!crate::base::files::temp_path(&path).exists());
}

#[test]
fn inconsistent_plot_data_is_a_write_error() {
    let dir = tempfile::tempdir().expect("temp dir");
    let path = dir.path().join("spectrum.png");
    let mut plot = synthetic_plot(2_000);
    plot.level_db.pop();
    let err = write_png(&path, &plot).expect_err("length mismatch");
    assert!(
        err.to_string().contains("1999 levels for 2000 frequencies"),
        "{err}"
    );
    let mut plot = synthetic_plot(2_000);
    plot.max_frequency_hz = f64::NAN;
    assert!(write_png(&path, &plot).is_err());
    assert!(!path.exists());
}

#[test]
fn column_max_keeps_a_one_bin_peak() {
    // 100k bins over 0..20 kHz at -90 dB, one bin at -10 dB: far more
    // bins than the 1000 columns, so averaging or sampling would lose it.
    let n = 100_000;
    let freqs: Vec<f64> = (0..n).map(|i| i as f64 * 0.2).collect();
    let mut values = vec![-90.0; n];
    values[43_211] = -10.0;
    let out = column_max(&freqs, &values, 0.0, 20_000.0, 1000);
    assert!(out.len() <= 1000);
    // Exact equality: the values are copied, not computed.
    assert!(out.iter().any(|&(f, v)| v == -10.0 && f == freqs[43_211]));
    assert!(out.windows(2).all(|w| w[0].0 < w[1].0));
}

#[test]
fn column_max_matches_a_brute_force_reference() {
    let mut rng = Lcg(7);
    let freqs: Vec<f64> = (0..5_000).map(|i| i as f64 * 0.37).collect();
    let values: Vec<f64> = freqs.iter().map(|_| -100.0 * rng.uniform()).collect();
    let (lo, hi, cols) = (100.0, 1500.0, 97);
    let out = column_max(&freqs, &values, lo, hi, cols);
    let mut expected = Vec::new();
    for c in 0..cols {
        // The obvious way: scan every bin for each column.
        let in_col = |f: f64| {
            let k = ((f - lo) / (hi - lo) * cols as f64) as usize;
            f >= lo && f <= hi && k.min(cols - 1) == c
        };
        let best = freqs.iter().zip(&values).filter(|(f, _)| in_col(**f)).fold(
            None,
            |b: Option<(f64, f64)>, (&f, &v)| match b {
                Some((_, bv)) if bv >= v => b,
                _ => Some((f, v)),
            },
        );
        expected.extend(best);
    }
    assert_eq!(out, expected);
}

#[test]
fn level_axis_follows_the_floor_or_the_span() {
    let mut plot = synthetic_plot(4_000);
    let (lo, hi) = level_range(&plot);
    // Highest peak is the first matched partial at -12 dB; the floor at
    // -90 dB minus the 5 dB margin is below -12 - 80, so the span wins.
    let tol = 1e-9; // the bounds are sums of the inputs, exact to rounding
    assert!((hi - (-12.0 + LEVEL_HEADROOM_DB)).abs() < tol, "{hi}");
    assert!((lo - (-12.0 - LEVEL_SPAN_DB)).abs() < tol, "{lo}");
    plot.floor_db = vec![-70.0; plot.freqs_hz.len()];
    let (lo, _) = level_range(&plot);
    assert!((lo - (-70.0 - FLOOR_MARGIN_DB)).abs() < tol, "{lo}");
}

#[test]
fn residual_axis_is_symmetric_and_at_least_ten_cents() {
    let line = |r: f64| PlotLine {
        frequency_hz: 100.0,
        label: "(1,1)".into(),
        matched: true,
        residual_cents: Some(r),
        expected_weak: false,
    };
    assert_eq!(
        residual_range(&[line(2.0), line(-3.0)]),
        MIN_RESIDUAL_RANGE_CENTS
    );
    // 17 cents · 1.15 = 19.55, rounded up to 20.
    assert_eq!(residual_range(&[line(-17.0)]), 20.0);
}
