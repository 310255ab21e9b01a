//! Speed of `fit` without the picture: median CPU time per recording on a
//! 2-second 48 kHz tap, with the FFT planner reused as a batch would.
//!
//! Run: `cargo run --release --example fit_speed`

use std::path::Path;
use std::time::Instant;
use tonus::base::units::{KgPerM2, Meters, NewtonsPerMeter};
use tonus::fitting::pipeline::{measure_with, FitOptions};
use tonus::physics::membrane::{Point, Shape};
use tonus::physics::panel::Panel;
use tonus::physics::synth::{synthesise, SynthConfig};
use tonus::signal::recording::Recording;

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

fn main() {
    // As the tonus binary does.
    tonus::keep_freed_memory();
    let runs: usize = std::env::var("TONUS_BENCH_RUNS")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(40);
    let cases = [
        (
            "rectangle 400 × 300 mm",
            Shape::Rectangle {
                width: Meters(0.4),
                height: Meters(0.3),
            },
            Point {
                u: 0.31,
                v: Some(0.27),
            },
            2500.0,
        ),
        (
            "circle 14 in",
            Shape::Circle {
                radius: Meters(0.1778),
            },
            Point { u: 0.6, v: None },
            3000.0,
        ),
    ];
    println!(
        "{:<24} {:>12} {:>12} {:>14} {:>12} {:>8}",
        "case", "fit [ms]", "FFT-only fit", "partials [ms]", "FFT [ms]", "modes"
    );
    for (name, shape, tap, tension) in cases {
        let mut cfg = SynthConfig::new(shape, KgPerM2(0.26), NewtonsPerMeter(tension), tap);
        cfg.duration_s = 2.0;
        cfg.snr_db = 30.0;
        let x = synthesise(&cfg).expect("synthesis");
        let rec = Recording::from_samples(Path::new("bench.wav"), x, 48000.0);
        let panel = Panel {
            shape,
            areal_density: Some(KgPerM2(0.26)),
            tap: Some(tap),
            pickup: None,
            areal_density_u: None,
            size_u: None,
            plate_material: None,
        };
        let opts = FitOptions::default();
        let mut planner = realfft::RealFftPlanner::new();
        let m = measure_with(&rec, &panel, &opts, &mut planner).expect("fit");
        let modes = m.fit.as_ref().map(|f| f.n_used).unwrap_or(0);
        let mut times = Vec::new();
        for _ in 0..runs {
            let t0 = Instant::now();
            let m = measure_with(&rec, &panel, &opts, &mut planner).expect("fit");
            times.push(t0.elapsed().as_secs_f64() * 1e3);
            std::hint::black_box(m);
        }
        // Before the damped-sinusoid refinement: FFT peaks only.
        let mut plain = FitOptions::default();
        plain.analysis.refine = false;
        let mut plain_times = Vec::new();
        for _ in 0..runs {
            let t0 = Instant::now();
            let m = measure_with(&rec, &panel, &plain, &mut planner).expect("fit");
            plain_times.push(t0.elapsed().as_secs_f64() * 1e3);
            std::hint::black_box(m);
        }
        // The partial finder alone (tap, spectrum, peaks, decays, and the
        // refinement of every peak, as `tonus partials` runs it).
        let mut partial_times = Vec::new();
        for _ in 0..runs {
            let t0 = Instant::now();
            let a = tonus::signal::partials::analyse_with(&rec, &opts.analysis, &mut planner)
                .expect("analysis");
            partial_times.push(t0.elapsed().as_secs_f64() * 1e3);
            std::hint::black_box(a);
        }
        // The span's FFT alone, for scale.
        let span = &rec.samples[m.analysis.tap.onset_sample..m.analysis.tap.end_sample];
        let mut fft_times = Vec::new();
        for _ in 0..runs {
            let t0 = Instant::now();
            let s = tonus::signal::spectrum::compute(span, None, 48000.0, &mut planner);
            fft_times.push(t0.elapsed().as_secs_f64() * 1e3);
            std::hint::black_box(s);
        }
        println!(
            "{:<24} {:>12.2} {:>12.2} {:>14.2} {:>12.2} {:>8}",
            name,
            median(times),
            median(plain_times),
            median(partial_times),
            median(fft_times),
            modes
        );
    }
}
