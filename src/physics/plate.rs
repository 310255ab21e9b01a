//! Prestressed thin plate with simply supported edges: tension plus
//! bending stiffness.
//!
//! The equation D·∇⁴w − T·∇²w + σ·∂²w/∂t² = 0 on a rectangle with simply
//! supported edges has the modes sin(mπx/Lx)·sin(nπy/Ly), so
//!
//! (2πf)²·σ = T·k² + D·k⁴,  k² = π²((m/Lx)² + (n/Ly)²),
//!
//! i.e. f = (1/2π)·√((T·k² + D·k⁴)/σ) (A. W. Leissa, "Vibration of
//! Plates", NASA SP-160, 1969, §4.1 for D alone and §10.1 for in-plane
//! tension). With T = 0 the frequency parameter ω·a²·√(σ/D) of a simply
//! supported square plate of side a is π²(m² + n²): 19.7392 for (1,1),
//! 49.3480 for (1,2) and (2,1), 78.9568 for (2,2) (Leissa, Table 4.1).
//! The model is linear in T/σ and D/σ: f² = (T/σ)·k²/(4π²) + (D/σ)·k⁴/(4π²).
//! Where thickness h and Poisson's ratio ν are known, E = 12(1 − ν²)·D/h³.

use crate::base::estimate::Estimate;
use std::f64::consts::PI;

/// k² = π²((m/Lx)² + (n/Ly)²), 1/m².
pub fn k_squared(lx: f64, ly: f64, m: u32, n: u32) -> f64 {
    PI * PI * ((m as f64 / lx).powi(2) + (n as f64 / ly).powi(2))
}

/// f(m,n) of the prestressed plate, Hz, from T/σ (m²/s²) and D/σ (m⁴/s²).
pub fn frequency_hz(t_over_sigma: f64, d_over_sigma: f64, k2: f64) -> f64 {
    (t_over_sigma * k2 + d_over_sigma * k2 * k2).max(0.0).sqrt() / (2.0 * PI)
}

/// Young's modulus from the bending stiffness of a thin plate:
/// E = 12·D·(1 − ν²)/h³ (D = E·h³/(12(1 − ν²)); S. Timoshenko and
/// S. Woinowsky-Krieger, "Theory of Plates and Shells", 2nd ed., 1959,
/// §4), with D in N·m, h the thickness in m, ν Poisson's ratio, E in Pa.
/// E is a product of powers of D, h and (1 − ν²), so the law of
/// propagation of uncertainty in relative form (GUM §5.1.6) gives
/// (u_E/E)² = (u_D/D)² + (3·u_h/h)² + (2ν·u_ν/(1 − ν²))², the inputs
/// taken as uncorrelated.
pub fn youngs_modulus(d: Estimate, m: &crate::physics::panel::PlateMaterial) -> Estimate {
    let h = m.thickness_m;
    let nu = m.poisson_ratio;
    let e = 12.0 * d.value * (1.0 - nu * nu) / h.powi(3);
    let rel = ((d.standard_uncertainty / d.value).powi(2)
        + (3.0 * m.thickness_u_m / h).powi(2)
        + (2.0 * nu * m.poisson_ratio_u / (1.0 - nu * nu)).powi(2))
    .sqrt();
    Estimate {
        value: e,
        standard_uncertainty: e.abs() * rel,
    }
}

#[cfg(test)]
mod tests {

    use super::*;

    /// Simply supported square plate, T = 0: ω·a²·√(σ/D) = π²(m² + n²)
    /// (Leissa, "Vibration of Plates", NASA SP-160, Table 4.1: 19.7392,
    /// 49.3480, 78.9568, 98.6960).
    #[test]
    fn pure_plate_matches_leissa_table_4_1() {
        let (a, d, sigma) = (0.3, 2.5, 1.2);
        for &(m, n, lambda) in &[
            (1, 1, 19.7392),
            (1, 2, 49.3480),
            (2, 2, 78.9568),
            (1, 3, 98.6960),
        ] {
            let f = frequency_hz(0.0, d / sigma, k_squared(a, a, m, n));
            let got = 2.0 * PI * f * a * a * (sigma / d).sqrt();
            // The table gives 6 significant figures.
            assert!((got - lambda).abs() < 1e-4, "({m},{n}) {got} vs {lambda}");
        }
    }

    /// E = 12·D·(1 − ν²)/h³: a steel sheet of E = 200 GPa, ν = 0.3,
    /// h = 1 mm has D = 200e9·1e-9/(12·0.91) = 18.315 N·m; back to E, and
    /// the relative uncertainty adds 3·u_h/h in quadrature.
    #[test]
    fn youngs_modulus_round_trip() {
        let d = 200e9 * 1e-9 / (12.0 * 0.91);
        let mat = crate::physics::panel::PlateMaterial {
            thickness_m: 1e-3,
            thickness_u_m: 1e-5,
            poisson_ratio: 0.3,
            poisson_ratio_u: 0.0,
        };
        let e = youngs_modulus(
            Estimate {
                value: d,
                standard_uncertainty: 0.02 * d,
            },
            &mat,
        );
        assert!((e.value / 200e9 - 1.0).abs() < 1e-12);
        let rel = (0.02f64.powi(2) + 0.03f64.powi(2)).sqrt();
        assert!((e.standard_uncertainty / e.value - rel).abs() < 1e-12);
    }
}
