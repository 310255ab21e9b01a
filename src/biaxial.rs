//! Biaxial tension on a rectangle: a woven mesh is stretched, and read,
//! in both thread directions.
//!
//! With tensions Tx along the width and Ty along the height the membrane
//! equation Tx·∂²w/∂x² + Ty·∂²w/∂y² = σ·∂²w/∂t² (fixed edges) gives
//!
//! f(m,n)² = (Tx·(m/Lx)² + Ty·(n/Ly)²) / (4σ) = A·m² + B·n²,
//!
//! A = Tx/(4σLx²), B = Ty/(4σLy²) (Morse & Ingard, "Theoretical Acoustics",
//! §5.2, with the two tensions kept apart). The fit of A and B is the
//! two-term fit of [`crate::fit::fit_free_aspect`]; this module turns it
//! into tensions with their uncertainties and correlation.
//!
//! What one tap cannot tell: relabelling every mode (m,n) → (n,m) while
//! swapping A ↔ B reproduces the same set of frequencies, so the labels —
//! and which axis carries the higher tension — are fixed only by the
//! matcher's isotropic start, by the tap point (a mode and its swapped
//! partner have different couplings there), or by a known axis. The swapped
//! solution is reported beside the chosen one.
//!
//! Identifiability: the sides enter only through Tx/(σLx²) and
//! Ty/(σLy²), so tensions and a free aspect ratio cannot be fitted together.

use crate::fit::Estimate;
use serde::Serialize;

/// The biaxial reading.
#[derive(Debug, Clone, Serialize)]
pub struct Biaxial {
    /// Tx/σ, m²/s².
    pub tx_over_sigma: Estimate,
    /// Ty/σ, m²/s².
    pub ty_over_sigma: Estimate,
    /// Tx, N/m (with σ).
    pub tension_x: Option<Estimate>,
    /// Ty, N/m (with σ).
    pub tension_y: Option<Estimate>,
    /// Tx/Ty.
    pub ratio: Estimate,
    /// 100·(Tx − Ty)/((Tx + Ty)/2), %.
    pub anisotropy_percent: Estimate,
    /// Correlation coefficient of Tx and Ty.
    pub correlation: f64,
    /// The swapped labelling's (Tx, Ty), N/m or m²/s² (without σ).
    pub swapped: (f64, f64),
}

/// Tensions from the two-term fit ((ln A, ln B), covariance).
pub fn from_two_term(p: [f64; 2], cov: [f64; 3], lx: f64, ly: f64, sigma: Option<f64>) -> Biaxial {
    let (a, b) = (p[0].exp(), p[1].exp());
    let tx = 4.0 * lx * lx * a;
    let ty = 4.0 * ly * ly * b;
    // The frequency method's common error (crate::fit::METHOD_CENTS on
    // every f, so twice that on ln A and ln B, fully correlated) is added;
    // it cancels in the ratio.
    let common = (2.0 * crate::fit::METHOD_CENTS / crate::fit::CENTS_PER_LN).powi(2);
    let (vaa, vab, vbb) = (cov[0] + common, cov[1] + common, cov[2] + common);
    // ln Tx = ln A + const, ln Ty = ln B + const: relative variances are
    // those of ln A and ln B.
    let u_tx = tx * vaa.max(0.0).sqrt();
    let u_ty = ty * vbb.max(0.0).sqrt();
    let r = tx / ty;
    let var_ln_r = (vaa + vbb - 2.0 * vab).max(0.0);
    let u_r = r * var_ln_r.sqrt();
    // ε = 200(r − 1)/(r + 1), dε/dr = 400/(r + 1)².
    let eps = 200.0 * (r - 1.0) / (r + 1.0);
    let u_eps = 400.0 / (r + 1.0).powi(2) * u_r;
    let corr = vab / (vaa * vbb).sqrt().max(1e-300);
    let s = sigma.unwrap_or(1.0);
    let scaled = |v: f64, u: f64| Estimate {
        value: v * s,
        standard_uncertainty: u * s,
    };
    Biaxial {
        tx_over_sigma: Estimate {
            value: tx,
            standard_uncertainty: u_tx,
        },
        ty_over_sigma: Estimate {
            value: ty,
            standard_uncertainty: u_ty,
        },
        tension_x: sigma.map(|_| scaled(tx, u_tx)),
        tension_y: sigma.map(|_| scaled(ty, u_ty)),
        ratio: Estimate {
            value: r,
            standard_uncertainty: u_r,
        },
        anisotropy_percent: Estimate {
            value: eps,
            standard_uncertainty: u_eps,
        },
        correlation: corr,
        // Swapped labels: A′ = B, B′ = A.
        swapped: (4.0 * lx * lx * b * s, 4.0 * ly * ly * a * s),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn isotropic_input_gives_unit_ratio() {
        // Tx = Ty = T: A = T/(4σLx²), B = T/(4σLy²).
        let (t, s, lx, ly): (f64, f64, f64, f64) = (2000.0, 0.04, 0.5, 0.4);
        let a = t / s / (4.0 * lx * lx);
        let b = t / s / (4.0 * ly * ly);
        let r = from_two_term([a.ln(), b.ln()], [1e-8, 0.0, 1e-8], lx, ly, Some(s));
        assert!((r.tension_x.unwrap().value - t).abs() < 1e-9);
        assert!((r.ratio.value - 1.0).abs() < 1e-12);
        assert!(r.anisotropy_percent.value.abs() < 1e-9);
    }
}
