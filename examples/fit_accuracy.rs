//! Accuracy of the fitted tension on synthetic taps: error, scatter and
//! how often the truth lies inside the reported ±2u interval, over the
//! fits graded sound or fair; fits graded doubtful or unfit are counted
//! apart, and "wrong" counts usable fits more than 2 % off (a mislabelled
//! spectrum that the grade failed to flag).
//!
//! Run: `cargo run --release --example fit_accuracy`

use std::path::Path;
use tonus::base::units::{KgPerM2, Meters, NewtonsPerMeter};
use tonus::fitting::pipeline::{measure_with, FitOptions};
use tonus::physics::membrane::{Point, Shape};
use tonus::physics::panel::Panel;
use tonus::physics::synth::{synthesise, Rng, SynthConfig};
use tonus::signal::recording::Recording;

fn main() {
    let trials = 40;
    println!(
        "{:<30} {:>6} {:>11} {:>11} {:>10} {:>9} {:>6}",
        "case", "SNR", "mean err %", "rms err %", "±2u cover", "doubtful", "wrong"
    );
    let cases: Vec<(&str, Shape, f64, f64)> = vec![
        (
            "screen 500×400 mm, 40 g/m²",
            Shape::Rectangle {
                width: Meters(0.5),
                height: Meters(0.4),
            },
            0.04,
            2000.0,
        ),
        (
            "panel 600×400 mm, 260 g/m²",
            Shape::Rectangle {
                width: Meters(0.6),
                height: Meters(0.4),
            },
            0.26,
            900.0,
        ),
        (
            "head 14 in, 264 g/m²",
            Shape::Circle {
                radius: Meters(0.1778),
            },
            0.264,
            3000.0,
        ),
    ];
    let mut planner = realfft::RealFftPlanner::new();
    for (name, shape, sigma, tension) in cases {
        for snr in [20.0, 30.0, 40.0] {
            let mut rng = Rng::new(99);
            let (mut sum, mut sum2, mut inside, mut unfit, mut n, mut wrong) =
                (0.0, 0.0, 0, 0, 0, 0);
            for k in 0..trials {
                // A random tap point away from the edges, a random tension
                // within ±20 %.
                let tap = match shape {
                    Shape::Rectangle { .. } => Point {
                        u: 0.15 + 0.35 * rng.uniform(),
                        v: Some(0.15 + 0.35 * rng.uniform()),
                    },
                    Shape::Circle { .. } => Point {
                        u: 0.2 + 0.6 * rng.uniform(),
                        v: None,
                    },
                };
                let t_true = tension * (0.8 + 0.4 * rng.uniform());
                let mut cfg = SynthConfig::new(shape, KgPerM2(sigma), NewtonsPerMeter(t_true), tap);
                cfg.snr_db = snr;
                cfg.seed = 1000 + k;
                cfg.t60_s = 0.4 + 0.6 * rng.uniform();
                let x = synthesise(&cfg).expect("synthesis");
                let rec = Recording::from_samples(Path::new("t.wav"), x, 48000.0);
                let panel = Panel {
                    shape,
                    areal_density: Some(KgPerM2(sigma)),
                    tap: Some(tap),
                    pickup: None,
                    areal_density_u: None,
                    size_u: None,
                    plate_material: None,
                };
                let m =
                    measure_with(&rec, &panel, &FitOptions::default(), &mut planner).expect("fit");
                match m.tension {
                    Some(t) if m.quality.grade <= tonus::fitting::quality::Grade::Fair => {
                        let e = t.value / t_true - 1.0;
                        if e.abs() > 0.02 {
                            wrong += 1;
                        }
                        sum += e;
                        sum2 += e * e;
                        n += 1;
                        if (t.value - t_true).abs() <= 2.0 * t.standard_uncertainty {
                            inside += 1;
                        }
                    }
                    _ => unfit += 1,
                }
            }
            let nf = n.max(1) as f64;
            println!(
                "{:<30} {:>6.0} {:>11.4} {:>11.4} {:>9.0}% {:>9} {:>6}",
                name,
                snr,
                100.0 * sum / nf,
                100.0 * (sum2 / nf).sqrt(),
                100.0 * inside as f64 / nf,
                unfit,
                wrong
            );
        }
    }
}
