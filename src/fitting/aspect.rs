//! Do the modes agree with the rectangle's entered aspect ratio?
//!
//! An isotropic rectangle's modes follow f² = A·m² + B·n² with
//! A = (c/2Lx)² and B = (c/2Ly)², so the ratio B/A = (Lx/Ly)² is fixed by
//! the entered sides. Fitting A and B freely ([`crate::fitting::fit::fit_free_aspect`])
//! and comparing its residuals with the isotropic fit's (an F-test for the
//! one extra parameter) tells whether the modes ask for another aspect
//! ratio: a side entered wrong, or a tension that differs along the two
//! axes (the two cannot be told apart from one tap, since only Tx/Lx² and
//! Ty/Ly² enter).
//!
//! When they do, the tension cannot be trusted to its fit uncertainty:
//! the truth lies between the tension with the width right (c = 2·Lx·√A)
//! and with the height right (c = 2·Ly·√B), so the half-spread of those
//! about the isotropic value becomes a rectangular-distribution term
//! (GUM 4.3.7: u = a/√3) in the wave speed's uncertainty, and a mismatch
//! of the sides beyond [`DOUBTFUL_ASPECT_FRACTION`] makes the fit
//! doubtful with one sentence naming the effective side.

use crate::base::estimate::{Estimate, CENTS_PER_LN};
use crate::base::warning::Warning;
use crate::fitting::fit::{self, FitResult, Observation, FREQUENCY_FLOOR_CENTS};

/// F statistic (one extra parameter) above which the free aspect ratio
/// fits significantly better: about the 0.1 % point of F(1, ν) for
/// ν ≥ 10, and stricter than it for fewer modes' worth of evidence than
/// that (F(1, 10) = 21 at 0.1 %).
pub const ASPECT_F_CRITICAL: f64 = 16.0;
/// Relative disagreement of the effective side with the entered one
/// above which the fit is doubtful (1 % moves a tension by up to 2 %).
pub const DOUBTFUL_ASPECT_FRACTION: f64 = 0.01;

/// The outcome of the check.
#[derive(Debug, Clone)]
pub struct AspectCheck {
    /// F statistic of the free aspect ratio against the entered one.
    pub f_statistic: f64,
    /// Height that fits with the width as entered, m.
    pub effective_height: Estimate,
    /// Width that fits with the height as entered, m.
    pub effective_width_m: f64,
    /// Relative standard uncertainty added to the wave speed (the
    /// rectangular term), 0 when the check passes.
    pub added_u_rel: f64,
}

/// Checks the matched modes `obs` (every one not an outlier, crowded ones
/// too: a wrong side moves the (m,n)/(n,m) neighbours apart by far more
/// than crowding pulls them) against a free aspect ratio. Returns None when
/// there is nothing to compare (fewer than four modes, or modes of one
/// (m/n) mix only).
pub fn check(obs: &[Observation], lx: f64, ly: f64) -> Option<AspectCheck> {
    if obs.len() < 4 {
        return None;
    }
    let free = fit::fit_free_aspect(obs, lx)?;
    let (p, _) = free.two_term?;
    let n = obs.len() as f64;
    // The isotropic wave speed over these same observations (the fit's own
    // may leave crowded modes out), ln c the mean of ln(f/g).
    let c = (obs
        .iter()
        .map(|o| (o.frequency_hz / o.factor).ln())
        .sum::<f64>()
        / n)
        .exp();
    let ss_iso: f64 = obs
        .iter()
        .map(|o| (o.frequency_hz / (c * o.factor)).ln().powi(2))
        .sum();
    let ss_free = (free.rms_residual_cents / CENTS_PER_LN).powi(2) * free.n_used as f64;
    let floor = (FREQUENCY_FLOOR_CENTS / CENTS_PER_LN).powi(2);
    let s2 = (ss_free / (n - 2.0).max(1.0)).max(floor);
    let f_statistic = ((ss_iso - ss_free) / s2).max(0.0);
    let ly_eff = free.effective_height_m?;
    // c = 2·Lx·√A with the width right, c = 2·Ly·√B with the height right.
    let c_width = 2.0 * lx * (0.5 * p[0]).exp();
    let c_height = 2.0 * ly * (0.5 * p[1]).exp();
    let lx_eff = ly * (0.5 * (p[1] - p[0])).exp();
    let half_spread = (c_width / c - 1.0).abs().max((c_height / c - 1.0).abs());
    let added_u_rel = if f_statistic > ASPECT_F_CRITICAL {
        half_spread / 3f64.sqrt()
    } else {
        0.0
    };
    Some(AspectCheck {
        f_statistic,
        effective_height: ly_eff,
        effective_width_m: lx_eff,
        added_u_rel,
    })
}

impl AspectCheck {
    /// The warning when the modes ask for other sides than entered by more
    /// than [`DOUBTFUL_ASPECT_FRACTION`] (significantly).
    pub fn warning(&self, lx: f64, ly: f64) -> Option<Warning> {
        let off = self.effective_height.value / ly - 1.0;
        (self.added_u_rel > 0.0 && off.abs() > DOUBTFUL_ASPECT_FRACTION).then(|| {
            Warning::ModelMisfit {
                detail: format!(
                    "the modes fit a rectangle of height {:.1} mm with the width as entered (entered {:.1} mm), or of width {:.1} mm with the height as entered (entered {:.1} mm), significantly better (F = {:.0}); check the dimensions, or fit --model biaxial if the tension differs along the sides; the tension's uncertainty includes the difference",
                    self.effective_height.value * 1e3,
                    ly * 1e3,
                    self.effective_width_m * 1e3,
                    lx * 1e3,
                    self.f_statistic
                ),
            }
        })
    }

    /// Adds the rectangular term to the fit's wave-speed uncertainty.
    pub fn widen(&self, f: &mut FitResult) {
        if self.added_u_rel > 0.0 {
            let c = f.wave_speed.value;
            let u = f.wave_speed.standard_uncertainty;
            f.wave_speed.standard_uncertainty = (u * u + (c * self.added_u_rel).powi(2)).sqrt();
            f.uncertainty_method.push_str(&format!(
                "; with {:.3} % for the aspect ratio the modes contradict (rectangular, GUM 4.3.7)",
                100.0 * self.added_u_rel
            ));
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::physics::membrane::rect_mode_frequency_hz;

    fn obs(lx_true: f64, ly_true: f64, lx: f64, ly: f64) -> Vec<Observation> {
        let mut v = Vec::new();
        for m in 1..=4 {
            for n in 1..=3 {
                v.push(Observation {
                    frequency_hz: rect_mode_frequency_hz(lx_true, ly_true, 100.0, m, n),
                    factor: rect_mode_frequency_hz(lx, ly, 1.0, m, n),
                    mode: (m, n),
                });
            }
        }
        v
    }

    #[test]
    fn right_sides_pass_and_a_wrong_height_is_named() {
        let ok = check(&obs(0.5, 0.4, 0.5, 0.4), 0.5, 0.4).unwrap();
        assert_eq!(ok.added_u_rel, 0.0);
        assert!(ok.warning(0.5, 0.4).is_none());
        // Height entered 4 % short: the effective height is the true one
        // (width as entered), and the warning names it.
        let bad = check(&obs(0.5, 0.4, 0.5, 0.384), 0.5, 0.384).unwrap();
        assert!((bad.effective_height.value / 0.4 - 1.0).abs() < 1e-6);
        assert!(bad.added_u_rel > 0.0);
        let w = bad.warning(0.5, 0.384).unwrap().to_string();
        assert!(w.contains("400.0 mm") && w.contains("384.0 mm"), "{w}");
        // The added term covers the tension error: with c = 100 m/s true,
        // the isotropic c over these modes sits within 2u of it.
        let c_iso = (obs(0.5, 0.4, 0.5, 0.384)
            .iter()
            .map(|o| (o.frequency_hz / o.factor).ln())
            .sum::<f64>()
            / 12.0)
            .exp();
        assert!(
            (c_iso / 100.0 - 1.0).abs() < 2.0 * bad.added_u_rel,
            "{c_iso} {}",
            bad.added_u_rel
        );
    }
}
