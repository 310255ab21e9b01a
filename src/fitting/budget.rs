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

use crate::base::units::Meters;
use crate::physics::airload;
use crate::physics::membrane::{circle_mode_frequency_hz, rect_mode_frequency_hz, Shape};
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
    /// by its factors ([`crate::fitting::calibration`]). σ and the dimensions then
    /// cancel: T = T_ref·(f/f_ref)² mode by mode.
    pub calibration: Option<crate::fitting::calibration::CalibrationTerm>,
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

/// Sensitivity coefficients cᵢ = ∂f/∂xᵢ at x by central differences with
/// the relative step `STEP_REL` (GUM §5.1.3, note 2, allows numerical
/// derivatives). The truncation error is O(h²), about 1e-10 relative.
pub fn sensitivities(f: &dyn Fn(&[f64]) -> f64, x: &[f64]) -> Vec<f64> {
    (0..x.len())
        .map(|i| {
            let h = x[i].abs().max(1e-12) * STEP_REL;
            let mut hi = x.to_vec();
            let mut lo = x.to_vec();
            hi[i] += h;
            lo[i] -= h;
            (f(&hi) - f(&lo)) / (2.0 * h)
        })
        .collect()
}

/// Combined standard uncertainty by the law of propagation of
/// uncertainty: u_c² = Σᵢ Σⱼ cᵢ·cⱼ·u(xᵢ)·u(xⱼ)·r(xᵢ, xⱼ) (GUM eq. 16), with
/// r the correlation matrix, or the identity when `r` is None (GUM eq. 10).
pub fn combined_standard_uncertainty(c: &[f64], u: &[f64], r: Option<&[Vec<f64>]>) -> f64 {
    let mut var = 0.0;
    for i in 0..c.len() {
        for j in 0..c.len() {
            let rij = match r {
                Some(r) => r[i][j],
                None if i == j => 1.0,
                None => 0.0,
            };
            var += c[i] * c[j] * u[i] * u[j] * rij;
        }
    }
    var.max(0.0).sqrt()
}

fn sens(f: impl Fn(f64) -> f64, x: f64) -> f64 {
    sensitivities(&|v: &[f64]| f(v[0]), &[x])[0]
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
    if let Some(cal) = inp.calibration {
        rows.extend(calibration_rows(cal, t0));
    }
    rows.push(density_row(inp));
    rows.extend(dimension_rows(inp));
    // Each row's contribution is |cᵢ|·u(xᵢ); the inputs are uncorrelated.
    let contributions: Vec<f64> = rows.iter().map(|r| r.contribution_n_per_m).collect();
    let uc = combined_standard_uncertainty(&vec![1.0; rows.len()], &contributions, None);
    Budget {
        tension_n_per_m: t0,
        rows,
        combined_standard_uncertainty_n_per_m: uc,
        coverage_factor: COVERAGE_FACTOR,
        expanded_uncertainty_n_per_m: COVERAGE_FACTOR * uc,
    }
}

/// The calibration's two terms: its reference tension and its per-mode
/// factors.
fn calibration_rows(cal: crate::fitting::calibration::CalibrationTerm, t0: f64) -> [BudgetRow; 2] {
    [
        BudgetRow {
            source: "calibration: reference tension (Type B, common to all modes)".into(),
            estimate: "factors r(m,n)".into(),
            standard_uncertainty: format!("{:.4} % of T_ref", 100.0 * cal.u_rel_reference),
            sensitivity: "T/T_ref".into(),
            contribution_n_per_m: t0 * cal.u_rel_reference,
        },
        BudgetRow {
            source: format!(
                "calibration: per-mode factors, {} modes (Type A/B)",
                cal.modes
            ),
            estimate: "factors r(m,n)".into(),
            standard_uncertainty: format!("{:.4} % of T", 100.0 * cal.u_rel_factors),
            sensitivity: "1".into(),
            contribution_n_per_m: t0 * cal.u_rel_factors,
        },
    ]
}

/// The areal density's term (zero sensitivity with a calibration made
/// with the same σ, against which it cancels).
fn density_row(inp: &BudgetInputs) -> BudgetRow {
    let (f, md) = (inp.frequencies_hz, inp.modes);
    let c_sigma = sens(
        |s| tension_for(&inp.shape, s, inp.air_loaded, f, md),
        inp.sigma,
    );
    // With a calibration made with the same σ and geometry, both cancel.
    let (c_sigma, note_cal) = if inp.calibration.is_some() {
        (0.0, ", cancels against the calibration")
    } else {
        (c_sigma, "")
    };
    let u_sigma = inp.u_sigma.unwrap_or(0.0);
    BudgetRow {
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
    }
}

/// The terms of the sides (rectangle) or the diameter (circle), which
/// cancel against a calibration made with the same geometry.
fn dimension_rows(inp: &BudgetInputs) -> Vec<BudgetRow> {
    let (f, md) = (inp.frequencies_hz, inp.modes);
    let mut rows = Vec::new();
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
    rows
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

    /// JCGM 100:2008 (GUM), Annex H.2, "Simultaneous resistance and
    /// reactance measurement": five sets of (V, I, φ) (Table H.2), the
    /// measurands R = V/I·cos φ, X = V/I·sin φ, Z = V/I, approach 1 of
    /// H.2.3: means, experimental standard deviations of the means and
    /// correlation coefficients (GUM eqs. 5, 14, 17), then eq. 16 with the
    /// numerical sensitivities of this module. The printed results (Table
    /// H.4 / H.2.4): R = 127.732 Ω, u(R) = 0.071 Ω; X = 219.847 Ω,
    /// u(X) = 0.295 Ω; Z = 254.260 Ω, u(Z) = 0.236 Ω. The data and
    /// results are quoted from memory of the GUM, checked for consistency
    /// here (the stated means 4.9990 V, 19.6610 mA, 1.04446 rad, s(V̄) =
    /// 0.0032 V, s(Ī) = 0.0095 mA, s(φ̄) = 0.00075 rad, r(V,I) = −0.36,
    /// r(V,φ) = 0.86, r(I,φ) = −0.65 all come out of the five sets). All
    /// agree to the printed digits except u(X): propagation gives
    /// 0.29558 Ω, one unit in the last printed place above the 0.295 that
    /// the GUM prints (its approach 2, averaging the five X_k, gives
    /// 0.29549); the test allows that one unit.
    #[test]
    fn gum_h2_resistance_and_reactance() {
        let sets = [
            [5.007, 19.663e-3, 1.0456],
            [4.994, 19.639e-3, 1.0438],
            [5.005, 19.640e-3, 1.0468],
            [4.990, 19.685e-3, 1.0428],
            [4.999, 19.678e-3, 1.0433],
        ];
        let n = sets.len() as f64;
        let mean: Vec<f64> = (0..3)
            .map(|j| sets.iter().map(|s| s[j]).sum::<f64>() / n)
            .collect();
        // Covariance of the means, GUM eq. 17: s(q̄, r̄) = Σ(q−q̄)(r−r̄)/(n(n−1)).
        let cov = |a: usize, b: usize| {
            sets.iter()
                .map(|s| (s[a] - mean[a]) * (s[b] - mean[b]))
                .sum::<f64>()
                / (n * (n - 1.0))
        };
        let u: Vec<f64> = (0..3).map(|j| cov(j, j).sqrt()).collect();
        let r: Vec<Vec<f64>> = (0..3)
            .map(|a| (0..3).map(|b| cov(a, b) / (u[a] * u[b])).collect())
            .collect();
        // The stated inputs, to their printed digits.
        assert!((mean[0] - 4.9990).abs() < 5e-5 && (mean[1] - 19.6610e-3).abs() < 5e-8);
        assert!((mean[2] - 1.04446).abs() < 5e-6);
        assert!((u[0] - 0.0032).abs() < 5e-5 && (u[1] - 0.0095e-3).abs() < 5e-8);
        assert!((u[2] - 0.00075).abs() < 5e-6);
        assert!((r[0][1] + 0.36).abs() < 0.005 && (r[0][2] - 0.86).abs() < 0.005);
        assert!((r[1][2] + 0.65).abs() < 0.005);
        type Measurand = fn(&[f64]) -> f64;
        let cases: [(&str, Measurand, f64, f64, f64); 3] = [
            ("R", |x| x[0] / x[1] * x[2].cos(), 127.732, 0.071, 0.0005),
            ("X", |x| x[0] / x[1] * x[2].sin(), 219.847, 0.295, 0.001),
            ("Z", |x| x[0] / x[1], 254.260, 0.236, 0.0005),
        ];
        for (name, f, value, u_printed, tol) in cases {
            let y = f(&mean);
            let c = sensitivities(&f, &mean);
            let uc = combined_standard_uncertainty(&c, &u, Some(&r));
            assert!((y - value).abs() < 0.0005, "{name} = {y}");
            assert!((uc - u_printed).abs() < tol, "u({name}) = {uc}");
        }
    }
}
