//! Fit of a prestressed plate (tension and bending stiffness, the model of
//! [`crate::physics::plate`]) to matched partials.

use crate::base::estimate::{Estimate, CENTS_PER_LN};
use crate::fitting::fit::{FREQUENCY_FLOOR_CENTS, METHOD_CENTS};
use serde::Serialize;
use std::f64::consts::PI;

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

/// Fits T/σ and D/σ to (frequency Hz, k² 1/m²) pairs by least squares in
/// log frequency: a weighted linear solve in f² to start, then Gauss–Newton
/// on r = ln f − ½·ln((P·k² + Q·k⁴)/(4π²)). Covariance s²(JᵀJ)⁻¹ with the
/// frequency method's common term added as in [`crate::fitting::fit`]. None with
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
    use super::*;
    use crate::physics::plate::{frequency_hz, k_squared};

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

    #[test]
    fn tension_and_stiffness_round_trip() {
        // A stiff panel: T = 800 N/m, D = 0.02 N·m, σ = 0.5 kg/m², 0.6 × 0.4 m.
        let (t, d, s) = (800.0, 0.02, 0.5);
        let mut obs = Vec::new();
        let mut rng = crate::physics::synth::Rng::new(4);
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
}
