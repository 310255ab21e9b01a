//! Uncertainty budget of the tension after the GUM (JCGM 100:2008).
//!
//! The measurand is T = σ·c², with c fitted to the matched partials for the
//! given geometry. Inputs: the fit itself (Type A, from the residual
//! scatter), the areal density σ ± u(σ) and each dimension ± u(L) (Type B,
//! as entered). Sensitivity coefficients cᵢ = ∂T/∂xᵢ are obtained by
//! central differences of the whole fit with the partial frequencies held
//! fixed (GUM §5.1.3 allows numerical derivatives), so they hold for the
//! air-loaded model too, where σ also enters the mode frequencies. The
//! inputs are taken as uncorrelated, and the law of propagation of
//! uncertainty gives u_c(T)² = Σ (cᵢ·u(xᵢ))² (GUM eq. 10). The expanded
//! uncertainty is U = k·u_c with k = 2 (GUM §6.3, about 95 % coverage for
//! a near-normal distribution).

use crate::airload;
use crate::membrane::{circle_mode_frequency_hz, rect_mode_frequency_hz, Shape};
use crate::units::Meters;
use serde::Serialize;

/// Coverage factor for the expanded uncertainty.
pub const COVERAGE_FACTOR: f64 = 2.0;
/// Relative step of the central differences.
const STEP_REL: f64 = 1e-5;

/// One line of the budget.
#[derive(Debug, Clone, Serialize)]
pub struct BudgetRow {
    /// What the input is.
    pub source: String,
    /// Its estimate, with unit.
    pub estimate: String,
    /// Its standard uncertainty, with unit.
    pub standard_uncertainty: String,
    /// Sensitivity coefficient ∂T/∂x, written with its unit.
    pub sensitivity: String,
    /// |cᵢ|·u(xᵢ), N/m.
    pub contribution_n_per_m: f64,
}

/// The full budget.
#[derive(Debug, Clone, Serialize)]
pub struct Budget {
    /// Tension estimate, N/m.
    pub tension_n_per_m: f64,
    /// The lines.
    pub rows: Vec<BudgetRow>,
    /// Combined standard uncertainty u_c, N/m.
    pub combined_standard_uncertainty_n_per_m: f64,
    /// k.
    pub coverage_factor: f64,
    /// U = k·u_c, N/m.
    pub expanded_uncertainty_n_per_m: f64,
}

/// What the budget needs from a fit.
#[derive(Debug, Clone)]
pub struct BudgetInputs<'a> {
    /// Outline as entered.
    pub shape: Shape,
    /// Areal density, kg/m².
    pub sigma: f64,
    /// Its standard uncertainty, kg/m² (None: not given, taken as 0).
    pub u_sigma: Option<f64>,
    /// Standard uncertainty of each dimension, m (None: taken as 0).
    pub u_size: Option<f64>,
    /// The model includes air loading.
    pub air_loaded: bool,
    /// Frequencies of the fitted partials, Hz.
    pub frequencies_hz: &'a [f64],
    /// Their mode labels.
    pub modes: &'a [(u32, u32)],
    /// Standard uncertainty of T from the fit itself, N/m.
    pub u_fit: f64,
    /// The calibration's parts, when `frequencies_hz` are already divided
    /// by its factors ([`crate::calibration`]). σ and the dimensions then
    /// cancel: T = T_ref·(f/f_ref)² mode by mode.
    pub calibration: Option<crate::calibration::CalibrationTerm>,
}

/// T = σ·c² refitted for a geometry and σ, the partials held fixed.
fn tension_for(shape: &Shape, sigma: f64, air: bool, freqs: &[f64], modes: &[(u32, u32)]) -> f64 {
    let mean_ln: f64 = freqs
        .iter()
        .zip(modes)
        .map(|(&f, &(m, n))| {
            let g = match *shape {
                Shape::Rectangle { width, height } => {
                    rect_mode_frequency_hz(width.0, height.0, 1.0, m, n)
                }
                Shape::Circle { radius } => circle_mode_frequency_hz(radius.0, 1.0, m, n),
            };
            let g = if air {
                g * airload::loading_factor(g, sigma)
            } else {
                g
            };
            (f / g).ln()
        })
        .sum::<f64>()
        / freqs.len().max(1) as f64;
    let c = mean_ln.exp();
    sigma * c * c
}

fn sens(f: impl Fn(f64) -> f64, x: f64) -> f64 {
    let h = x.abs().max(1e-12) * STEP_REL;
    (f(x + h) - f(x - h)) / (2.0 * h)
}

/// Builds the budget.
pub fn budget(inp: &BudgetInputs) -> Budget {
    let f = inp.frequencies_hz;
    let md = inp.modes;
    let t0 = tension_for(&inp.shape, inp.sigma, inp.air_loaded, f, md);
    let mut rows = vec![BudgetRow {
        source: format!("fit to {} modes (Type A)", f.len()),
        estimate: format!("{t0:.4} N/m"),
        standard_uncertainty: format!("{:.4} N/m", inp.u_fit),
        sensitivity: "1".into(),
        contribution_n_per_m: inp.u_fit,
    }];
    let c_sigma = sens(
        |s| tension_for(&inp.shape, s, inp.air_loaded, f, md),
        inp.sigma,
    );
    if let Some(cal) = inp.calibration {
        rows.push(BudgetRow {
            source: "calibration: reference tension (Type B, common to all modes)".into(),
            estimate: "factors r(m,n)".into(),
            standard_uncertainty: format!("{:.4} % of T_ref", 100.0 * cal.u_rel_reference),
            sensitivity: "T/T_ref".into(),
            contribution_n_per_m: t0 * cal.u_rel_reference,
        });
        rows.push(BudgetRow {
            source: format!(
                "calibration: per-mode factors, {} modes (Type A/B)",
                cal.modes
            ),
            estimate: "factors r(m,n)".into(),
            standard_uncertainty: format!("{:.4} % of T", 100.0 * cal.u_rel_factors),
            sensitivity: "1".into(),
            contribution_n_per_m: t0 * cal.u_rel_factors,
        });
    }
    // With a calibration made with the same σ and geometry, both cancel.
    let (c_sigma, note_cal) = if inp.calibration.is_some() {
        (0.0, ", cancels against the calibration")
    } else {
        (c_sigma, "")
    };
    let u_sigma = inp.u_sigma.unwrap_or(0.0);
    rows.push(BudgetRow {
        source: format!(
            "areal density σ (Type B{}{note_cal})",
            if inp.u_sigma.is_none() {
                ", no uncertainty given"
            } else {
                ""
            }
        ),
        estimate: format!("{:.5} kg/m²", inp.sigma),
        standard_uncertainty: format!("{u_sigma:.5} kg/m²"),
        sensitivity: format!("{c_sigma:.4} (N/m)/(kg/m²)"),
        contribution_n_per_m: (c_sigma * u_sigma).abs(),
    });
    let u_l = inp.u_size.unwrap_or(0.0);
    let note = match (inp.u_size.is_none(), inp.calibration.is_some()) {
        (true, false) => ", no uncertainty given",
        (true, true) => ", no uncertainty given, cancels against the calibration",
        (false, true) => ", cancels against the calibration",
        (false, false) => "",
    };
    let cal_scale = if inp.calibration.is_some() { 0.0 } else { 1.0 };
    let mut dim_row = |name: &str, value: f64, c: f64| {
        let c = c * cal_scale;
        rows.push(BudgetRow {
            source: format!("{name} (Type B{note})"),
            estimate: format!("{:.2} mm", value * 1e3),
            standard_uncertainty: format!("{:.2} mm", u_l * 1e3),
            sensitivity: format!("{:.4} (N/m)/mm", c * 1e-3),
            contribution_n_per_m: (c * u_l).abs(),
        });
    };
    match inp.shape {
        Shape::Rectangle { width, height } => {
            let cw = sens(
                |w| {
                    tension_for(
                        &Shape::Rectangle {
                            width: Meters(w),
                            height,
                        },
                        inp.sigma,
                        inp.air_loaded,
                        f,
                        md,
                    )
                },
                width.0,
            );
            let ch = sens(
                |h| {
                    tension_for(
                        &Shape::Rectangle {
                            width,
                            height: Meters(h),
                        },
                        inp.sigma,
                        inp.air_loaded,
                        f,
                        md,
                    )
                },
                height.0,
            );
            dim_row("width Lx", width.0, cw);
            dim_row("height Ly", height.0, ch);
        }
        Shape::Circle { radius } => {
            // The diameter is what is measured: d = 2a.
            let cd = sens(
                |d| {
                    tension_for(
                        &Shape::Circle {
                            radius: Meters(d / 2.0),
                        },
                        inp.sigma,
                        inp.air_loaded,
                        f,
                        md,
                    )
                },
                2.0 * radius.0,
            );
            dim_row("diameter d", 2.0 * radius.0, cd);
        }
    }
    let uc = rows
        .iter()
        .map(|r| r.contribution_n_per_m.powi(2))
        .sum::<f64>()
        .sqrt();
    Budget {
        tension_n_per_m: t0,
        rows,
        combined_standard_uncertainty_n_per_m: uc,
        coverage_factor: COVERAGE_FACTOR,
        expanded_uncertainty_n_per_m: COVERAGE_FACTOR * uc,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The ideal model is a product of powers, T ∝ σ·L², so the GUM's
    /// relative form applies: (u_c/T)² = (u_σ/σ)² + (2·u_d/d)² for a
    /// circle (GUM §5.1.6, eq. 12, for Y = c·X₁^p₁·X₂^p₂). With σ =
    /// 0.26 ± 0.005 kg/m² (1.923 %) and d = 355.6 ± 0.5 mm (2 × 0.1406 % =
    /// 0.2812 %), u_c/T = √(1.923² + 0.2812²) % = 1.9436 %, ignoring the
    /// fit's own part (set to 0 here).
    #[test]
    fn circle_budget_matches_the_power_law_form() {
        let shape = Shape::Circle {
            radius: Meters(0.1778),
        };
        let c = 107.0;
        let modes = [(0, 1), (1, 1), (2, 1), (0, 2)];
        let freqs: Vec<f64> = modes
            .iter()
            .map(|&(m, n)| circle_mode_frequency_hz(0.1778, c, m, n))
            .collect();
        let b = budget(&BudgetInputs {
            shape,
            sigma: 0.26,
            u_sigma: Some(0.005),
            u_size: Some(0.0005),
            air_loaded: false,
            frequencies_hz: &freqs,
            modes: &modes,
            u_fit: 0.0,
            calibration: None,
        });
        let t = 0.26 * c * c;
        assert!((b.tension_n_per_m / t - 1.0).abs() < 1e-12);
        let rel = b.combined_standard_uncertainty_n_per_m / t;
        let expect = ((0.005f64 / 0.26).powi(2) + (2.0 * 0.5 / 355.6f64).powi(2)).sqrt();
        // Central differences with a 1e-5 step: agreement to 1e-6 relative.
        assert!((rel / expect - 1.0).abs() < 1e-6, "{rel} vs {expect}");
        assert!(
            (b.expanded_uncertainty_n_per_m - 2.0 * b.combined_standard_uncertainty_n_per_m).abs()
                < 1e-12
        );
    }

    #[test]
    fn rectangle_dimension_sensitivities_add_to_two() {
        // T ∝ (size)² overall: scaling both sides by λ scales T by λ², so
        // Lx·∂T/∂Lx + Ly·∂T/∂Ly = 2T (Euler's theorem for homogeneous
        // functions of degree 2).
        let modes = [(1, 1), (2, 1), (1, 2), (3, 1), (2, 2)];
        let freqs: Vec<f64> = modes
            .iter()
            .map(|&(m, n)| rect_mode_frequency_hz(0.5, 0.4, 200.0, m, n))
            .collect();
        let t = |w: f64, h: f64| {
            tension_for(
                &Shape::Rectangle {
                    width: Meters(w),
                    height: Meters(h),
                },
                0.04,
                false,
                &freqs,
                &modes,
            )
        };
        let t0 = t(0.5, 0.4);
        let cw = sens(|w| t(w, 0.4), 0.5);
        let ch = sens(|h| t(0.5, h), 0.4);
        assert!(((0.5 * cw + 0.4 * ch) / t0 - 2.0).abs() < 1e-6);
    }
}
