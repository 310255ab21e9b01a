//! A loaded specification ([`Spec`]) and what it does with a measurement:
//! the decision input, the decision, the labels of its reports.

use crate::acceptance::decision::{self, DecisionInput, DecisionRule, Limits, Verdict};
use crate::base::estimate::Estimate;
use crate::base::units::KgPerM2;
use crate::fitting::calibration;
use crate::fitting::pipeline::Measurement;
use crate::fitting::quality::Grade;
use crate::physics::membrane::Shape;
use crate::physics::panel::{Panel, PanelSpec};
use std::path::PathBuf;
use std::sync::Arc;

use super::model::SpecModel;

/// Grade required when `min-quality` is not given: fair or better.
pub const DEFAULT_MIN_QUALITY: Grade = Grade::Fair;

/// Relative difference of areal densities above which a measurement is
/// taken to have been made with another panel than the specification's.
/// The values are copied, not recomputed, so only rounding is allowed for.
const SAME_DENSITY_REL: f64 = 1e-9;

/// A loaded, checked specification.
#[derive(Debug, Clone)]
pub struct Spec {
    /// The file it was read from.
    pub path: PathBuf,
    /// `[spec] name`.
    pub name: String,
    /// `[spec] version`.
    pub version: String,
    /// `[spec] note`, if given.
    pub note: Option<String>,
    /// SHA-256 of the file's bytes, lower-case hex (64 characters).
    pub hash: String,
    /// The `[panel]` values as written.
    pub panel_spec: PanelSpec,
    /// Standard uncertainty of the areal density, kg/m².
    pub areal_density_u: KgPerM2,
    /// The fit model.
    pub model: SpecModel,
    /// Tolerance limits and the least quality decided on.
    pub limits: Limits,
    /// The decision rule and coverage factor.
    pub rule: DecisionRule,
    /// The calibration named by `[panel] calibration`, loaded and checked
    /// against the panel.
    pub calibration: Option<Arc<calibration::Loaded>>,
    /// SHA-256 of the calibration file's bytes, hex (with `calibration`).
    pub calibration_sha256: Option<String>,
    pub(super) panel: Panel,
}

impl Spec {
    /// The panel to measure with.
    pub fn panel(&self) -> Panel {
        self.panel.clone()
    }

    /// Standard uncertainty of the tension with the areal density's
    /// uncertainty included, N/m:
    /// u_T = √(u_fit² + (T·u_σ/σ)²), T the tension and u_fit its fit
    /// uncertainty (N/m), σ and u_σ the areal density and its standard
    /// uncertainty (kg/m²). T = σ·c² is proportional to σ, so the relative
    /// uncertainties add in quadrature (GUM, JCGM 100:2008 §5.1.6).
    pub fn tension_uncertainty(&self, tension: &Estimate) -> f64 {
        let sigma = self.panel.areal_density.map(|s| s.0).unwrap_or(f64::NAN);
        let rel = self.areal_density_u.0 / sigma;
        tension.standard_uncertainty.hypot(tension.value * rel)
    }

    /// Standard uncertainty of a tension fitted against the calibration,
    /// N/m: u_T = √(u_fit² + (T·u_ref)² + (T·u_f)²), u_ref = u(T_ref)/T_ref
    /// the reference tension's relative part and u_f the per-mode
    /// factors' ([`calibration::CalibrationTerm`]). σ does not enter: with
    /// the calibration's σ, T = T_ref·(f/f_ref)² mode by mode, so the areal
    /// density and its uncertainty cancel ([`crate::fitting::calibration`]).
    pub fn calibrated_tension_uncertainty(
        tension: &Estimate,
        term: &calibration::CalibrationTerm,
    ) -> f64 {
        let rel = term.u_rel_reference.hypot(term.u_rel_factors);
        tension.standard_uncertainty.hypot(tension.value * rel)
    }

    /// What [`decision::decide`] is given for a measurement: the tension
    /// with [`Spec::tension_uncertainty`] (or
    /// [`Spec::calibrated_tension_uncertainty`] when the fit used the
    /// calibration), the anisotropy of the biaxial model, the unevenness
    /// from the resolved split pairs (the spread 2|ε| with u = 2·u(ε),
    /// percent, [`crate::physics::evenness::Evenness::spread_pct`]), the grade and
    /// its reasons.
    pub fn decision_input(&self, m: &Measurement) -> DecisionInput {
        let term = m.calibration.as_ref().and_then(|c| c.term);
        DecisionInput {
            tension: m.tension.map(|t| Estimate {
                value: t.value,
                standard_uncertainty: match &term {
                    Some(term) => Spec::calibrated_tension_uncertainty(&t, term),
                    None => self.tension_uncertainty(&t),
                },
            }),
            anisotropy_percent: m.biaxial.as_ref().map(|b| b.anisotropy_percent),
            unevenness_percent: m.evenness.as_ref().map(|e| Estimate {
                value: e.spread_pct,
                standard_uncertainty: 2.0 * e.epsilon_u_pct,
            }),
            unevenness_problem: if m.evenness.is_none() {
                unevaluated_pairs(m)
            } else {
                None
            },
            grade: m.quality.grade,
            grade_reasons: m.quality.reasons.clone(),
        }
    }

    /// Decides on a measurement made with [`Spec::panel`].
    ///
    /// A measurement made with another shape or areal density is
    /// [`decision::Decision::NotMeasured`]: its tension does not answer
    /// this specification.
    pub fn decide(&self, m: &Measurement) -> Verdict {
        let mut input = self.decision_input(m);
        let same_shape = m.panel.shape == self.panel.shape;
        let same_density = match (m.panel.areal_density, self.panel.areal_density) {
            (Some(a), Some(b)) => (a.0 - b.0).abs() <= SAME_DENSITY_REL * b.0.abs(),
            _ => false,
        };
        let mut verdict = decision::decide(&input, &self.limits, &self.rule);
        if !(same_shape && same_density) {
            input.tension = None;
            verdict = decision::decide(&input, &self.limits, &self.rule);
            verdict.decision = decision::Decision::NotMeasured {
                reason: format!(
                    "the measurement was made for {} with areal density {}, not the specification's {} ({}); measure with the specification's panel",
                    m.panel.describe(),
                    m.panel
                        .areal_density
                        .map(|s| s.to_string())
                        .unwrap_or_else(|| "not given".into()),
                    self.panel.describe(),
                    self.spec_label()
                ),
            };
        }
        verdict
    }

    /// The unevenness from split pairs ([`crate::physics::evenness`]) applies: a
    /// circle or a square panel measured with a membrane model (isotropic
    /// or air); the same test `max-unevenness-percent` is checked against.
    pub fn unevenness_applies(&self) -> bool {
        let shape_ok = match self.panel.shape {
            Shape::Circle { .. } => true,
            Shape::Rectangle { width, height } => {
                // Tolerance: as when the file is read (rounding only).
                (width.0 - height.0).abs() <= 1e-9 * width.0
            }
        };
        shape_ok && matches!(self.model, SpecModel::Isotropic | SpecModel::Air)
    }

    /// "name version" for messages.
    pub fn spec_label(&self) -> String {
        format!("{} version {}", self.name, self.version)
    }
}

/// The split pairs that would give the unevenness ((1,n) on a circle,
/// (m,n)/(n,m) with m ≠ n on a square panel) but have a member without a
/// finite standard uncertainty (an FFT peak that was not refined), so
/// that [`crate::physics::evenness`] leaves them out; None when there are none.
fn unevaluated_pairs(m: &Measurement) -> Option<String> {
    let bad: Vec<String> = m
        .modes
        .iter()
        .filter(|r| r.degeneracy >= 2)
        .filter(|r| match m.panel.shape {
            Shape::Circle { .. } => r.m == 1,
            Shape::Rectangle { .. } => r.m != r.n,
        })
        .filter_map(|r| {
            let p = r.pair?;
            let ok = |u: f64| u.is_finite() && u >= 0.0;
            (!(ok(p.lower.frequency_u_hz) && ok(p.upper.frequency_u_hz))).then(|| {
                format!(
                    "{} split into {:.2} and {:.2} Hz",
                    r.labels, p.lower.frequency_hz, p.upper.frequency_hz
                )
            })
        })
        .collect();
    (!bad.is_empty()).then(|| {
        format!(
            "a split pair was found ({}) but a member has no frequency uncertainty, so its unevenness could not be computed",
            bad.join("; ")
        )
    })
}
