//! How long the live bench takes to answer: a synthetic round of taps (14 in
//! head, 3000 N/m, ε = 2 % along 35°, 30 dB SNR, taps 1.3 s apart) is fed
//! to the live loop of `tonus round -` in 20 ms pieces, as a sound card
//! delivers them, and the time from the arrival of the last piece the
//! round needs (the end of the last tap's window, 1.2 s after its onset,
//! when its decay has been heard) to the printed result is measured; and
//! each tap's decision time (its fit) on its own.
//!
//! `cargo run --release --example round_latency [-- LUGS]` (default 8 lugs;
//! `TONUS_BENCH_RUNS=N` repetitions, default 5).

use clap::Parser;
use std::io::Read;
use std::time::{Duration, Instant};
use tonus::app::cli::{Cli, Command};
use tonus::physics::membrane::{Point, Shape};
use tonus::physics::synth::{self, SynthConfig};
use tonus::signal::stream::AudioStream;

/// A reader that hands out at most `piece` bytes per read.
struct Pieces {
    data: Vec<u8>,
    at: usize,
    piece: usize,
}

impl Read for Pieces {
    fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
        let n = self.piece.min(buf.len()).min(self.data.len() - self.at);
        buf[..n].copy_from_slice(&self.data[self.at..self.at + n]);
        self.at += n;
        Ok(n)
    }
}

fn wav_bytes(x: &[f64], rate: u32) -> Vec<u8> {
    let mut w = Vec::new();
    w.extend_from_slice(b"RIFF\xff\xff\xff\xffWAVEfmt ");
    w.extend_from_slice(&16u32.to_le_bytes());
    w.extend_from_slice(&1u16.to_le_bytes());
    w.extend_from_slice(&1u16.to_le_bytes());
    w.extend_from_slice(&rate.to_le_bytes());
    w.extend_from_slice(&(2 * rate).to_le_bytes());
    w.extend_from_slice(&2u16.to_le_bytes());
    w.extend_from_slice(&16u16.to_le_bytes());
    w.extend_from_slice(b"data\xff\xff\xff\x7f");
    for v in x {
        w.extend_from_slice(&((v * 32767.0).round() as i16).to_le_bytes());
    }
    w
}

fn main() {
    let lugs: usize = std::env::args()
        .nth(1)
        .and_then(|s| s.parse().ok())
        .unwrap_or(8);
    let runs: usize = std::env::var("TONUS_BENCH_RUNS")
        .ok()
        .and_then(|s| s.parse().ok())
        .unwrap_or(5);
    let shape = Shape::Circle {
        radius: tonus::base::units::Meters(0.1778),
    };
    let mut cfg = SynthConfig::new(
        shape,
        tonus::base::units::KgPerM2(0.26),
        tonus::base::units::NewtonsPerMeter(3000.0),
        Point { u: 0.6, v: None },
    );
    cfg.tension_skew = Some(0.02);
    cfg.skew_angle_deg = 35.0;
    cfg.snr_db = 30.0;
    cfg.pre_roll_s = 0.3;
    cfg.tap_interval_s = 1.3;
    cfg.duration_s = 0.3 + 1.3 * lugs as f64 + 0.2;
    let angles: Vec<f64> = (0..lugs)
        .map(|j| -(360.0 / lugs as f64) * j as f64)
        .collect();
    let x = synth::synthesise_round(&cfg, &angles, 3.0).expect("synthesis");
    let bytes = wav_bytes(&x, cfg.sample_rate_hz);
    let lug_arg = lugs.to_string();
    let cli = Cli::parse_from([
        "tonus",
        "round",
        "-",
        "--diameter",
        "14in",
        "--areal-density",
        "0.26kg/m2",
        "--lugs",
        &lug_arg,
        "--rounds",
        "1",
    ]);
    let Command::Round(args) = cli.command else {
        unreachable!()
    };
    let settings = tonus::app::round::settings(&args).expect("settings");
    let piece = 2 * (cfg.sample_rate_hz as usize / 50); // 20 ms of 16-bit mono
    let mut results: Vec<Duration> = Vec::new();
    let mut wall: Vec<Duration> = Vec::new();
    for _ in 0..runs {
        let mut stream = AudioStream::open(
            Pieces {
                data: bytes.clone(),
                at: 0,
                piece,
            },
            None,
            "bench".into(),
        )
        .expect("stream");
        let t0 = Instant::now();
        tonus::app::round::live(&mut stream, &args, &settings, &mut |_| {}, &mut |d| {
            results.push(d)
        })
        .expect("round");
        wall.push(t0.elapsed());
    }
    // Each tap's decision on its own: the fit of its cut.
    let onsets = tonus::signal::stream::TapFinder::new(cfg.sample_rate_hz as f64).feed(&x);
    let panel = tonus::physics::panel::Panel::from_spec(&tonus::physics::panel::PanelSpec {
        diameter: Some("14in".into()),
        areal_density: Some("0.26kg/m2".into()),
        ..Default::default()
    })
    .expect("panel");
    let opts = tonus::fitting::pipeline::FitOptions::default();
    let mut per_tap = Vec::new();
    for (i, &angle) in angles.iter().enumerate().take(onsets.len()) {
        let t0 = Instant::now();
        tonus::fitting::round_taps::measure_tap(
            &x,
            cfg.sample_rate_hz as f64,
            &onsets,
            i,
            angle,
            &panel,
            &opts,
            std::path::Path::new("bench"),
        )
        .expect("tap");
        per_tap.push(t0.elapsed());
    }
    let ms = |d: &Duration| d.as_secs_f64() * 1e3;
    let med = |v: &mut Vec<Duration>| {
        v.sort();
        v[v.len() / 2]
    };
    let (mut r, mut p) = (results.clone(), per_tap.clone());
    println!(
        "{lugs} lugs, {:.1} s of audio in 20 ms pieces, {runs} runs",
        x.len() as f64 / cfg.sample_rate_hz as f64
    );
    println!(
        "last tap's window complete → round result: median {:.0} ms, slowest {:.0} ms",
        ms(&med(&mut r)),
        ms(results.iter().max().unwrap())
    );
    println!(
        "one tap's decision (its fit), {} taps: median {:.0} ms, slowest {:.0} ms",
        per_tap.len(),
        ms(&med(&mut p)),
        ms(per_tap.iter().max().unwrap())
    );
    println!(
        "whole stream processed in {:.2} s (median; the audio lasts {:.1} s)",
        med(&mut wall).as_secs_f64(),
        x.len() as f64 / cfg.sample_rate_hz as f64
    );
}
