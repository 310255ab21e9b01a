//! Fitting the model to the chosen observations: the wave speed of the
//! isotropic membrane, the two terms of the free-aspect and biaxial
//! membranes, or tension and bending stiffness of the plate.

use crate::base::estimate::{Estimate, CENTS_PER_LN};
use crate::base::warning::Warning;
use crate::fitting::fit::{self, FitModel, FitResult, Observation};
use crate::fitting::measurement::FitOptions;
use crate::fitting::plate_fit::{self, PlateFit};
use crate::physics::membrane::Shape;
use crate::physics::panel::Panel;

/// Fits the model of `opts` to `fit_obs`; the plate model also returns
/// its plate fit, and pushes a warning when the free fit's bending
/// stiffness is significantly negative.
pub fn fit_model(
    fit_obs: &[Observation],
    panel: &Panel,
    opts: &FitOptions,
    warnings: &mut Vec<Warning>,
) -> (Option<FitResult>, Option<PlateFit>) {
    match (opts.model, panel.shape) {
        (FitModel::FreeAspect | FitModel::Biaxial, Shape::Rectangle { width, .. }) => (
            fit::fit_free_aspect(fit_obs, width.0).or_else(|| fit::fit_isotropic(fit_obs)),
            None,
        ),
        (FitModel::Stiff, Shape::Rectangle { width, height }) => {
            let plate = fit_plate(fit_obs, panel, (width.0, height.0), warnings);
            let result = match &plate {
                Some((pf, outliers)) => stiff_result(fit_obs, pf, outliers, (width.0, height.0)),
                None => fit::fit_isotropic(fit_obs),
            };
            (result, plate.map(|(pf, _)| pf))
        }
        _ => (fit::fit_isotropic(fit_obs), None),
    }
}

/// The plate fit with outliers screened as for the membrane (residuals
/// beyond OUTLIER_MADS scaled MADs leave the fit, which is redone), and
/// Young's modulus where thickness and ν are given. Returns the fit and
/// the outliers' indices in `fit_obs`.
fn fit_plate(
    fit_obs: &[Observation],
    panel: &Panel,
    (lx, ly): (f64, f64),
    warnings: &mut Vec<Warning>,
) -> Option<(PlateFit, Vec<usize>)> {
    let sigma = panel.areal_density.map(|s| s.0);
    let pairs: Vec<(f64, f64)> = fit_obs
        .iter()
        .map(|o| {
            (
                o.frequency_hz,
                crate::physics::plate::k_squared(lx, ly, o.mode.0, o.mode.1),
            )
        })
        .collect();
    let mut plate = plate_fit::fit(&pairs, sigma)?;
    let mut outliers: Vec<usize> = Vec::new();
    let r: Vec<f64> = plate
        .residuals_cents
        .iter()
        .map(|c| c / CENTS_PER_LN)
        .collect();
    let keep = fit::inliers(&r);
    if keep.len() < pairs.len() {
        let kept: Vec<(f64, f64)> = keep.iter().map(|&i| pairs[i]).collect();
        if let Some(refit) = plate_fit::fit(&kept, sigma) {
            plate = refit;
            outliers = (0..pairs.len()).filter(|i| !keep.contains(i)).collect();
        }
    }
    if let Some(neg) = plate.negative_d_over_sigma {
        if neg.value < -2.0 * neg.standard_uncertainty {
            warnings.push(Warning::ModelMisfit {
                detail: format!(
                    "the free fit puts the bending stiffness below zero (D/σ = {:.3e} ± {:.1e} m⁴/s²); the plate model does not fit, D is held at 0",
                    neg.value, neg.standard_uncertainty
                ),
            });
        }
    }
    // D's uncertainty includes σ's (D = σ·(D/σ)).
    if let (Some(mat), Some(s)) = (panel.plate_material, panel.areal_density) {
        let q = plate.d_over_sigma;
        let u_rel_sigma = panel.areal_density_u.map(|u| u.0 / s.0).unwrap_or(0.0);
        let d = Estimate {
            value: s.0 * q.value,
            standard_uncertainty: (s.0 * q.value).abs()
                * ((q.standard_uncertainty / q.value).powi(2) + u_rel_sigma.powi(2)).sqrt(),
        };
        if d.value > 0.0 {
            plate.youngs_modulus = Some(crate::physics::plate::youngs_modulus(d, &mat));
        }
    }
    Some((plate, outliers))
}

/// The fit result of the plate model: the wave speed is √(T/σ), the
/// residuals and counts the plate fit's.
fn stiff_result(
    fit_obs: &[Observation],
    pf: &PlateFit,
    outliers: &[usize],
    (lx, ly): (f64, f64),
) -> Option<FitResult> {
    let n_plate = fit_obs.len() - outliers.len();
    fit::fit_isotropic(fit_obs).map(|mut f| {
        f.model = FitModel::Stiff;
        f.wave_speed = Estimate {
            value: pf.t_over_sigma.value.max(0.0).sqrt(),
            standard_uncertainty: 0.5 * pf.t_over_sigma.standard_uncertainty
                / pf.t_over_sigma.value.abs().sqrt().max(1e-300),
        };
        f.plate = Some((pf.t_over_sigma.value, pf.d_over_sigma.value, lx, ly));
        f.rms_residual_cents = pf.rms_residual_cents;
        f.outliers = outliers.to_vec();
        f.n_used = n_plate;
        f.dof = n_plate.saturating_sub(2);
        f.iterations = pf.iterations;
        f.stop_reason = pf.stop_reason.clone();
        f.uncertainty_method = format!(
            "s²(JᵀJ)⁻¹, {} modes, 2 parameters (Type A), with {} cents for the frequency method",
            fit_obs.len(),
            fit::METHOD_CENTS
        );
        f
    })
}
