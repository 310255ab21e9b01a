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

use crate::fit::{Estimate, CENTS_PER_LN, FREQUENCY_FLOOR_CENTS, METHOD_CENTS};
use serde::Serialize;
use std::f64::consts::PI;

/// k² = π²((m/Lx)² + (n/Ly)²), 1/m².
pub fn k_squared(lx: f64, ly: f64, m: u32, n: u32) -> f64 {
    PI * PI * ((m as f64 / lx).powi(2) + (n as f64 / ly).powi(2))
}

/// f(m,n) of the prestressed plate, Hz, from T/σ (m²/s²) and D/σ (m⁴/s²).
pub fn frequency_hz(t_over_sigma: f64, d_over_sigma: f64, k2: f64) -> f64 {
    (t_over_sigma * k2 + d_over_sigma * k2 * k2).max(0.0).sqrt() / (2.0 * PI)
}

/// The fitted plate.
#[derive(Debug, Clone, Serialize)]
pub struct PlateFit {
    /// T/σ, m²/s².
    pub t_over_sigma: Estimate,
    /// D/σ, m⁴/s².
    pub d_over_sigma: Estimate,
    /// Correlation of the two.
    pub correlation: f64,
    /// Tension T, N/m (with σ).
    pub tension: Option<Estimate>,
    /// Bending stiffness D, N·m (with σ).
    pub bending_stiffness: Option<Estimate>,
    /// Residuals, cents, in input order.
    pub residuals_cents: Vec<f64>,
    /// RMS residual, cents.
    pub rms_residual_cents: f64,
    /// Gauss–Newton iterations.
    pub iterations: usize,
    /// Young's modulus E, Pa, where thickness and Poisson's ratio are
    /// given ([`youngs_modulus`]).
    pub youngs_modulus: Option<Estimate>,
    /// When the free fit put D/σ below zero: that unconstrained value
    /// (m⁴/s²). The reported fit then holds D = 0 (a bending stiffness is
    /// never negative; the constrained least-squares optimum lies on the
    /// bound), and a value far below zero says the plate model does not
    /// fit.
    pub negative_d_over_sigma: Option<Estimate>,
}

/// Young's modulus from the bending stiffness of a thin plate:
/// E = 12·D·(1 − ν²)/h³ (D = E·h³/(12(1 − ν²)); S. Timoshenko and
/// S. Woinowsky-Krieger, "Theory of Plates and Shells", 2nd ed., 1959,
/// §4), with D in N·m, h the thickness in m, ν Poisson's ratio, E in Pa.
/// E is a product of powers of D, h and (1 − ν²), so the law of
/// propagation of uncertainty in relative form (GUM §5.1.6) gives
/// (u_E/E)² = (u_D/D)² + (3·u_h/h)² + (2ν·u_ν/(1 − ν²))², the inputs
/// taken as uncorrelated.
pub fn youngs_modulus(d: Estimate, m: &crate::panel::PlateMaterial) -> Estimate {
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

/// Fits T/σ and D/σ to (frequency Hz, k² 1/m²) pairs by least squares in
/// log frequency: a weighted linear solve in f² to start, then Gauss–Newton
/// on r = ln f − ½·ln((P·k² + Q·k⁴)/(4π²)). Covariance s²(JᵀJ)⁻¹ with the
/// frequency method's common term added as in [`crate::fit`]. None with
/// fewer than three observations or a singular design.
pub fn fit(obs: &[(f64, f64)], sigma: Option<f64>) -> Option<PlateFit> {
    if obs.len() < 3 {
        return None;
    }
    let basis = |k2: f64| (k2 / (4.0 * PI * PI), k2 * k2 / (4.0 * PI * PI));
    // Weighted linear start: rows (u, v)/f², target 1.
    let (mut suu, mut suv, mut svv, mut su, mut sv) = (0.0, 0.0, 0.0, 0.0, 0.0);
    for &(f, k2) in obs {
        let (u, v) = basis(k2);
        let (u, v) = (u / (f * f), v / (f * f));
        suu += u * u;
        suv += u * v;
        svv += v * v;
        su += u;
        sv += v;
    }
    let det = suu * svv - suv * suv;
    if det.abs() <= 1e-14 * suu * svv {
        return None;
    }
    let mut p = (su * svv - sv * suv) / det;
    let mut q = (suu * sv - suv * su) / det;
    let mut iterations = 0;
    let mut cov = [0.0; 3];
    let mut resid = vec![0.0; obs.len()];
    for it in 0..20 {
        iterations = it + 1;
        let (mut jtj00, mut jtj01, mut jtj11, mut jtr0, mut jtr1, mut ss) =
            (0.0, 0.0, 0.0, 0.0, 0.0, 0.0);
        for (i, &(f, k2)) in obs.iter().enumerate() {
            let (u, v) = basis(k2);
            let s = (p * u + q * v).max(1e-30);
            let r = f.ln() - 0.5 * s.ln();
            resid[i] = r;
            let (j0, j1) = (-0.5 * u / s, -0.5 * v / s);
            jtj00 += j0 * j0;
            jtj01 += j0 * j1;
            jtj11 += j1 * j1;
            jtr0 += j0 * r;
            jtr1 += j1 * r;
            ss += r * r;
        }
        let d = jtj00 * jtj11 - jtj01 * jtj01;
        if d.abs() < 1e-300 {
            return None;
        }
        let dof = (obs.len() as f64 - 2.0).max(1.0);
        let s2 = (ss / dof).max((FREQUENCY_FLOOR_CENTS / CENTS_PER_LN).powi(2));
        cov = [jtj11 / d * s2, -jtj01 / d * s2, jtj00 / d * s2];
        // Gauss–Newton step: δ = −(JᵀJ)⁻¹Jᵀr.
        let dp = -(jtj11 * jtr0 - jtj01 * jtr1) / d;
        let dq = -(jtj00 * jtr1 - jtj01 * jtr0) / d;
        p += dp;
        q += dq;
        if dp.abs() <= 1e-12 * p.abs() && dq.abs() <= 1e-12 * q.abs().max(1e-300) {
            break;
        }
    }
    // D ≥ 0: a negative optimum moves to the bound D = 0, where the model
    // is the membrane's and ln P = mean of (2 ln f − ln u) is closed form;
    // D keeps the free fit's uncertainty as its scale.
    let mut negative = None;
    if q < 0.0 {
        negative = Some(Estimate {
            value: q,
            standard_uncertainty: cov[2].max(0.0).sqrt(),
        });
        let ln_p = obs
            .iter()
            .map(|&(f, k2)| 2.0 * f.ln() - basis(k2).0.ln())
            .sum::<f64>()
            / obs.len() as f64;
        p = ln_p.exp();
        q = 0.0;
        let mut ss = 0.0;
        for (i, &(f, k2)) in obs.iter().enumerate() {
            resid[i] = f.ln() - 0.5 * (p * basis(k2).0).ln();
            ss += resid[i] * resid[i];
        }
        let dof = (obs.len() as f64 - 1.0).max(1.0);
        let s2 = (ss / dof).max((FREQUENCY_FLOOR_CENTS / CENTS_PER_LN).powi(2));
        // var(ln P) = 4·s²/N for the mean of 2·ln f.
        cov = [4.0 * s2 / obs.len() as f64 * p * p, 0.0, cov[2]];
    }
    // The method's common error acts on ln f, i.e. like a scale error on
    // both P and Q: var(ln P) and var(ln Q) each gain (2·δ)².
    let common = (2.0 * METHOD_CENTS / CENTS_PER_LN).powi(2);
    let u_p = (cov[0] + common * p * p).sqrt();
    let u_q = (cov[2] + common * q * q).sqrt();
    let corr = (cov[1] + common * p * q) / (u_p * u_q).max(1e-300);
    let rms = (resid.iter().map(|r| r * r).sum::<f64>() / resid.len() as f64).sqrt() * CENTS_PER_LN;
    Some(PlateFit {
        t_over_sigma: Estimate {
            value: p,
            standard_uncertainty: u_p,
        },
        d_over_sigma: Estimate {
            value: q,
            standard_uncertainty: u_q,
        },
        correlation: corr,
        tension: sigma.map(|s| Estimate {
            value: s * p,
            standard_uncertainty: s * u_p,
        }),
        bending_stiffness: sigma.map(|s| Estimate {
            value: s * q,
            standard_uncertainty: s * u_q,
        }),
        residuals_cents: resid.iter().map(|r| r * CENTS_PER_LN).collect(),
        rms_residual_cents: rms,
        iterations,
        youngs_modulus: None,
        negative_d_over_sigma: negative,
    })
}

#[cfg(test)]
mod tests {

    #[test]
    fn bending_stiffness_is_never_negative() {
        // A membrane whose high modes sit a little flat (f ∝ k·(1 − δk²)):
        // the free fit's D/σ is negative; the fit holds D = 0, keeps the
        // negative value for the misfit test, and T/σ is the membrane's.
        let (lx, ly, c2) = (0.3, 0.2, 1000.0);
        let obs: Vec<(f64, f64)> = [(1, 1), (2, 1), (1, 2), (3, 1), (2, 2), (3, 2), (1, 3)]
            .iter()
            .map(|&(m, n)| {
                let k2 = k_squared(lx, ly, m, n);
                (frequency_hz(c2, 0.0, k2) * (1.0 - 1e-6 * k2), k2)
            })
            .collect();
        let f = fit(&obs, Some(0.5)).unwrap();
        assert_eq!(f.d_over_sigma.value, 0.0);
        let neg = f.negative_d_over_sigma.expect("the free fit went negative");
        assert!(neg.value < 0.0);
        assert!(
            (f.t_over_sigma.value / c2 - 1.0).abs() < 0.02,
            "{}",
            f.t_over_sigma.value
        );
        assert!(f.bending_stiffness.unwrap().value >= 0.0);
    }

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

    #[test]
    fn tension_and_stiffness_round_trip() {
        // A stiff panel: T = 800 N/m, D = 0.02 N·m, σ = 0.5 kg/m², 0.6 × 0.4 m.
        let (t, d, s) = (800.0, 0.02, 0.5);
        let mut obs = Vec::new();
        let mut rng = crate::synth::Rng::new(4);
        for m in 1..=6 {
            for n in 1..=4 {
                let k2 = k_squared(0.6, 0.4, m, n);
                let f = frequency_hz(t / s, d / s, k2) * (0.5 * rng.normal() / CENTS_PER_LN).exp();
                obs.push((f, k2));
            }
        }
        let fit = fit(&obs, Some(s)).unwrap();
        let te = fit.tension.unwrap();
        let de = fit.bending_stiffness.unwrap();
        assert!((te.value / t - 1.0).abs() < 0.02, "{te:?}");
        assert!((de.value / d - 1.0).abs() < 0.02, "{de:?}");
        assert!((te.value - t).abs() < 3.0 * te.standard_uncertainty);
        assert!((de.value - d).abs() < 3.0 * de.standard_uncertainty);
    }

    /// E = 12·D·(1 − ν²)/h³: a steel sheet of E = 200 GPa, ν = 0.3,
    /// h = 1 mm has D = 200e9·1e-9/(12·0.91) = 18.315 N·m; back to E, and
    /// the relative uncertainty adds 3·u_h/h in quadrature.
    #[test]
    fn youngs_modulus_round_trip() {
        let d = 200e9 * 1e-9 / (12.0 * 0.91);
        let mat = crate::panel::PlateMaterial {
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
