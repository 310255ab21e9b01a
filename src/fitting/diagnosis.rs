//! What a recording shows when the membrane model does not fit it: the
//! fundamental a person hears, the overtones as multiples of it, and
//! which model's mode pattern comes closest.
//!
//! A fit graded doubtful or unfit is not a measurement. Real drums are
//! two-headed, air-loaded, their shells ring and their pitch glides; a
//! single membrane model may not explain them. Then tonus says what it
//! found rather than offer a tension: the fundamental (the lowest partial
//! within [`FUNDAMENTAL_WITHIN_DB`] of the strongest, the peak a listener
//! takes for the pitch), the strong overtones (within
//! [`OVERTONE_WITHIN_DB`] of the strongest) as ratios to it, and for each
//! model (the ideal membrane; with the areal density, the air-loaded one)
//! the rms distance in cents from each overtone ratio to the nearest mode
//! ratio of that model with its lowest mode on the fundamental.

use crate::physics::membrane::{ModeLine, Shape};
use crate::signal::partials::Partial;
use serde::Serialize;

/// A partial this close to the strongest (dB) can be the fundamental.
pub const FUNDAMENTAL_WITHIN_DB: f64 = 12.0;
/// Overtones this close to the strongest (dB) are listed and compared.
pub const OVERTONE_WITHIN_DB: f64 = 20.0;
/// Most overtones listed.
pub const MAX_OVERTONES: usize = 6;

use crate::base::estimate::CENTS_PER_LN;

/// How near one model's mode pattern comes to the overtones.
#[derive(Debug, Clone, Serialize)]
pub struct ModelDistance {
    /// The model's name, as `--model` reads it.
    pub model: String,
    /// RMS distance of the overtone ratios from the model's nearest mode
    /// ratios, cents.
    pub rms_cents: f64,
    /// The model's nearest mode ratio to each overtone.
    pub nearest_ratios: Vec<f64>,
}

/// The statement that replaces a tension the model cannot give.
#[derive(Debug, Clone, Serialize)]
pub struct Diagnosis {
    /// The fundamental, Hz.
    pub fundamental_hz: f64,
    /// Strong overtones as multiples of the fundamental, rising.
    pub overtone_ratios: Vec<f64>,
    /// Each model's distance, closest first.
    pub models: Vec<ModelDistance>,
}

impl Diagnosis {
    /// The closest model's name.
    pub fn closest(&self) -> Option<&str> {
        self.models.first().map(|m| m.model.as_str())
    }

    /// One sentence for the terminal and the reports.
    pub fn sentence(&self) -> String {
        let ratios = |v: &[f64]| {
            v.iter()
                .map(|r| format!("{r:.2}"))
                .collect::<Vec<_>>()
                .join(", ")
        };
        let models = self
            .models
            .iter()
            .map(|m| format!("{} {:.0} cents", m.model, m.rms_cents))
            .collect::<Vec<_>>()
            .join(", ");
        if self.overtone_ratios.is_empty() {
            return format!(
                "the membrane model does not fit this recording, so its tension is not a measurement: the fundamental is {:.1} Hz, with no strong overtone to compare with a model's mode pattern",
                self.fundamental_hz
            );
        }
        format!(
            "the membrane model does not fit this recording, so its tension is not a measurement: the fundamental is {:.1} Hz, strong overtones at {} × it; nearest mode patterns (rms distance): {}; closest: {}",
            self.fundamental_hz,
            ratios(&self.overtone_ratios),
            if models.is_empty() { "none".to_string() } else { models },
            self.closest().unwrap_or("none")
        )
    }
}

/// A partial that does not decay (slower than
/// [`crate::signal::partials::SUSTAINED_DECAY_DB_PER_S`]) is a steady tone beside
/// the tap (hum, a machine), not part of what the tap sounds.
fn decays(p: &Partial) -> bool {
    p.decay_rate_db_per_s
        .is_none_or(|r| r >= crate::signal::partials::SUSTAINED_DECAY_DB_PER_S)
}

/// The fundamental of a list of partials: the lowest within
/// [`FUNDAMENTAL_WITHIN_DB`] of the strongest, among those that decay.
pub fn fundamental(partials: &[Partial]) -> Option<f64> {
    let top = partials
        .iter()
        .filter(|p| decays(p))
        .map(|p| p.level_db)
        .fold(f64::NEG_INFINITY, f64::max);
    partials
        .iter()
        .filter(|p| decays(p))
        .filter(|p| p.level_db >= top - FUNDAMENTAL_WITHIN_DB)
        .map(|p| p.frequency_hz)
        .min_by(f64::total_cmp)
}

/// Describes the partials against the shape's ideal and (with σ)
/// air-loaded mode patterns. None without partials.
pub fn diagnose(partials: &[Partial], shape: &Shape, sigma: Option<f64>) -> Option<Diagnosis> {
    let f0 = fundamental(partials)?;
    let top = partials
        .iter()
        .filter(|p| decays(p))
        .map(|p| p.level_db)
        .fold(f64::NEG_INFINITY, f64::max);
    let mut over: Vec<f64> = partials
        .iter()
        .filter(|p| decays(p))
        .filter(|p| p.level_db >= top - OVERTONE_WITHIN_DB && p.frequency_hz > f0 * 1.01)
        .map(|p| p.frequency_hz / f0)
        .collect();
    over.sort_by(f64::total_cmp);
    over.truncate(MAX_OVERTONES);
    let top_ratio = over.last().copied().unwrap_or(1.0) * 1.1;
    let g1 = shape.fundamental_factor();
    let ideal = shape.lines(g1 * top_ratio.max(2.0), None, None);
    let mut models = vec![distance("isotropic", &ideal, &over)];
    if let Some(s) = sigma {
        // Air loading lowers the low modes most, so the loaded pattern
        // needs lines a little further up for the same ratios.
        let wide = shape.lines(g1 * top_ratio.max(2.0) * 1.5, None, None);
        models.push(distance(
            "air",
            &crate::physics::airload::loaded_lines(&wide, s),
            &over,
        ));
    }
    models.sort_by(|a, b| a.rms_cents.total_cmp(&b.rms_cents));
    Some(Diagnosis {
        fundamental_hz: f0,
        overtone_ratios: over,
        models,
    })
}

fn distance(name: &str, lines: &[ModeLine], over: &[f64]) -> ModelDistance {
    let g0 = lines.first().map_or(1.0, |l| l.factor);
    let ratios: Vec<f64> = lines.iter().map(|l| l.factor / g0).collect();
    let mut nearest = Vec::with_capacity(over.len());
    let mut ss = 0.0;
    for &r in over {
        let best = ratios
            .iter()
            .copied()
            .min_by(|a, b| (r / a).ln().abs().total_cmp(&(r / b).ln().abs()))
            .unwrap_or(1.0);
        ss += (CENTS_PER_LN * (r / best).ln()).powi(2);
        nearest.push(best);
    }
    ModelDistance {
        model: name.to_string(),
        rms_cents: if over.is_empty() {
            0.0
        } else {
            (ss / over.len() as f64).sqrt()
        },
        nearest_ratios: nearest,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::base::units::Meters;

    fn partial(f: f64, level: f64) -> Partial {
        Partial {
            frequency_hz: f,
            level_db: level,
            ..Partial::default()
        }
    }

    #[test]
    fn ideal_circle_pattern_is_closest_to_the_ideal_model() {
        // Bessel-zero ratios j(1,1)/j(0,1) = 1.5933, j(2,1)/j(0,1) =
        // 2.1355, j(0,2)/j(0,1) = 2.2954 (Fletcher & Rossing, Table 3.2).
        let f0 = 100.0;
        let ps = vec![
            partial(f0, -10.0),
            partial(f0 * 1.5933, -12.0),
            partial(f0 * 2.1355, -14.0),
            partial(f0 * 2.2954, -15.0),
            partial(35.0, -40.0),
        ];
        let shape = Shape::Circle {
            radius: Meters(0.2),
        };
        let d = diagnose(&ps, &shape, Some(0.26)).unwrap();
        assert!((d.fundamental_hz - f0).abs() < 1e-9, "35 Hz is 30 dB down");
        assert_eq!(d.overtone_ratios.len(), 3);
        assert_eq!(d.closest(), Some("isotropic"));
        assert!(d.models[0].rms_cents < 0.5, "{:?}", d.models);
        assert!(d.sentence().contains("100.0 Hz"));
    }
}
