//! What the data can determine: the Jacobian of a fit, its numerical
//! rank, its condition number and the parameter correlations.
//!
//! Every model is fitted in log frequency, so the Jacobian J has the rows
//! ∂ln f_i/∂ln p_k over the fitted modes — dimensionless, which makes the
//! condition number κ = s_max/s_min (ratio of the extreme singular values
//! of J) comparable between models and free of the parameters' units:
//!
//! - isotropic and air-loaded: one column of ones (ln c);
//! - free aspect and biaxial, f² = A·m² + B·n²: ∂ln f/∂ln A = A·m²/(2f²),
//!   ∂ln f/∂ln B = B·n²/(2f²) (for biaxial, ln Tx and ln Ty differ from
//!   ln A and ln B by constants);
//! - stiff plate, f² = (P·k² + Q·k⁴)/(4π²): ∂ln f/∂ln P = P·k²/(2·4π²f²),
//!   ∂ln f/∂ln Q = Q·k⁴/(2·4π²f²).
//!
//! The numerical rank counts the singular values above [`RANK_REL_TOL`]
//! times the largest. A fit is refused when the rank is below the number
//! of parameters or κ exceeds [`MAX_CONDITION`]: κ² is the condition of
//! JᵀJ, and at κ = 10⁷ it reaches 10¹⁴, where double precision (relative
//! rounding 2.2·10⁻¹⁶) leaves only about two significant digits in
//! (JᵀJ)⁻¹ — the parameters then follow the noise, not the data
//! (G. H. Golub and C. F. Van Loan, "Matrix Computations", 4th ed., 2013,
//! §5.3.8 on the sensitivity of least squares). The correlation matrix is
//! that of s²·(JᵀJ)⁺ (pseudo-inverse), i.e. the fit's covariance scaled
//! to unit diagonal; |r| near 1 warns that two parameters trade off.
//!
//! The classic degenerate set is biaxial tension with a free aspect ratio
//! on a rectangle: f² = Tx·m²/(4σLx²) + Ty·n²/(4σLy²), so Ty and Ly enter
//! only as Ty/Ly² and the three columns (ln Tx, ln Ty, ln Ly) have rank 2.
//! [`biaxial_free_aspect_jacobian`] builds it; the command line refuses
//! that request before fitting (see [`crate::app::options::fit_options`]).

use crate::fitting::fit::{FitModel, FitResult, Observation};
use nalgebra::DMatrix;
use serde::Serialize;

/// Singular values below this fraction of the largest count as zero.
pub const RANK_REL_TOL: f64 = 1e-10;
/// Largest condition number of J accepted.
pub const MAX_CONDITION: f64 = 1e7;

/// The identifiability of one fit.
#[derive(Debug, Clone, Serialize)]
pub struct Identifiability {
    /// Parameter names (columns of J).
    pub parameters: Vec<String>,
    /// Modes (rows of J).
    pub modes: usize,
    /// Numerical rank of J.
    pub rank: usize,
    /// s_max/s_min (infinite when rank deficient).
    pub condition_number: f64,
    /// Singular values of J, largest first.
    pub singular_values: Vec<f64>,
    /// Correlation matrix of the parameters (null entries where
    /// undetermined).
    pub correlation: Vec<Vec<f64>>,
    /// The threshold applied.
    pub max_condition: f64,
    /// Rank full and κ within the threshold.
    pub identifiable: bool,
}

impl Identifiability {
    /// One sentence saying why the fit is refused, or None.
    pub fn refusal(&self) -> Option<String> {
        if self.identifiable {
            return None;
        }
        let names = self.parameters.join(", ");
        Some(if self.rank < self.parameters.len() {
            format!(
                "the {} fitted modes determine only {} of the {} parameters ({names}); add modes of other (m,n) mixes (tap off-centre, extend --max-frequency) or fit a simpler model",
                self.modes,
                self.rank,
                self.parameters.len()
            )
        } else {
            format!(
                "the fit of {names} is ill-conditioned (condition number {:.1e} above {:.0e}); add modes of other (m,n) mixes or fit a simpler model",
                self.condition_number, self.max_condition
            )
        })
    }
}

/// Rank, condition and correlations of a Jacobian (rows: modes,
/// columns: parameters).
pub fn assess(parameters: &[&str], j: &DMatrix<f64>) -> Identifiability {
    let p = j.ncols();
    let svd = j.clone().svd(false, true);
    let mut s: Vec<f64> = svd.singular_values.iter().copied().collect();
    s.sort_by(|a, b| b.total_cmp(a));
    let s_max = s.first().copied().unwrap_or(0.0);
    let rank = s
        .iter()
        .filter(|&&v| v > RANK_REL_TOL * s_max && v > 0.0)
        .count();
    let condition = if rank == p && rank > 0 {
        s_max / s[p - 1]
    } else {
        f64::INFINITY
    };
    // (JᵀJ)⁺ = V·Σ⁻²·Vᵀ over the non-zero singular values.
    let mut cov = DMatrix::<f64>::zeros(p, p);
    if let Some(vt) = &svd.v_t {
        for (k, &sv) in svd.singular_values.iter().enumerate() {
            if sv > RANK_REL_TOL * s_max && sv > 0.0 {
                let v = vt.row(k).transpose();
                cov += (&v * v.transpose()) / (sv * sv);
            }
        }
    }
    let correlation = (0..p)
        .map(|a| {
            (0..p)
                .map(|b| {
                    let d = (cov[(a, a)] * cov[(b, b)]).sqrt();
                    if d > 0.0 && rank == p {
                        cov[(a, b)] / d
                    } else if a == b {
                        1.0
                    } else {
                        f64::NAN
                    }
                })
                .collect()
        })
        .collect();
    Identifiability {
        parameters: parameters.iter().map(|s| s.to_string()).collect(),
        modes: j.nrows(),
        rank,
        condition_number: condition,
        singular_values: s,
        correlation,
        max_condition: MAX_CONDITION,
        identifiable: rank == p && p > 0 && condition <= MAX_CONDITION,
    }
}

/// J of f² = A·m² + B·n² at (A, B) for the given modes, columns (ln A, ln B).
pub fn two_term_jacobian(modes: &[(u32, u32)], a: f64, b: f64) -> DMatrix<f64> {
    DMatrix::from_fn(modes.len(), 2, |i, k| {
        let (m, n) = (modes[i].0 as f64, modes[i].1 as f64);
        let f2 = a * m * m + b * n * n;
        if k == 0 {
            0.5 * a * m * m / f2
        } else {
            0.5 * b * n * n / f2
        }
    })
}

/// J of the degenerate request, biaxial tension with a free height:
/// columns (ln Tx, ln Ty, ln Ly) for f² = Tx·m²/(4σLx²) + Ty·n²/(4σLy²).
pub fn biaxial_free_aspect_jacobian(
    modes: &[(u32, u32)],
    tx_over_sigma: f64,
    ty_over_sigma: f64,
    lx: f64,
    ly: f64,
) -> DMatrix<f64> {
    let a = tx_over_sigma / (4.0 * lx * lx);
    let b = ty_over_sigma / (4.0 * ly * ly);
    let two = two_term_jacobian(modes, a, b);
    // ln B = ln Ty − 2 ln Ly + const: the Ly column is −2 × the Ty column.
    DMatrix::from_fn(modes.len(), 3, |i, k| match k {
        0 => two[(i, 0)],
        1 => two[(i, 1)],
        _ => -2.0 * two[(i, 1)],
    })
}

/// The identifiability of a finished fit over the observations it kept.
pub fn for_fit(model: FitModel, kept: &[Observation], fit: &FitResult) -> Identifiability {
    if let Some((p, q, lx, ly)) = fit.plate {
        let four_pi2 = 4.0 * std::f64::consts::PI.powi(2);
        let j = DMatrix::from_fn(kept.len(), 2, |i, k| {
            let k2 = crate::physics::plate::k_squared(lx, ly, kept[i].mode.0, kept[i].mode.1);
            let f2 = (p * k2 + q * k2 * k2) / four_pi2;
            if k == 0 {
                0.5 * p * k2 / four_pi2 / f2
            } else {
                0.5 * q * k2 * k2 / four_pi2 / f2
            }
        });
        return assess(&["ln T", "ln D"], &j);
    }
    if let Some((lp, _)) = fit.two_term {
        let modes: Vec<(u32, u32)> = kept.iter().map(|o| o.mode).collect();
        let j = two_term_jacobian(&modes, lp[0].exp(), lp[1].exp());
        let names: [&str; 2] = if model == FitModel::Biaxial {
            ["ln Tx", "ln Ty"]
        } else {
            ["ln A (= ln c² − ln 4Lx²)", "ln B (= ln c² − ln 4Ly²)"]
        };
        return assess(&names, &j);
    }
    assess(&["ln c"], &DMatrix::from_element(kept.len(), 1, 1.0))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn grid_modes() -> Vec<(u32, u32)> {
        (1..=4).flat_map(|m| (1..=3).map(move |n| (m, n))).collect()
    }

    #[test]
    fn well_posed_sets_are_accepted() {
        let modes = grid_modes();
        let iso = assess(&["ln c"], &DMatrix::from_element(modes.len(), 1, 1.0));
        assert!(iso.identifiable && iso.rank == 1);
        // One column of ones: a single singular value √N, κ = 1.
        assert!((iso.condition_number - 1.0).abs() < 1e-12);
        let two = assess(&["ln Tx", "ln Ty"], &two_term_jacobian(&modes, 1e4, 1.2e4));
        assert!(two.identifiable && two.rank == 2, "{two:?}");
        assert!(two.condition_number < 100.0);
        assert!(two.correlation[0][1].abs() < 1.0 && two.refusal().is_none());
        // Correlation matrix symmetric with unit diagonal.
        assert!((two.correlation[0][1] - two.correlation[1][0]).abs() < 1e-12);
        assert!((two.correlation[0][0] - 1.0).abs() < 1e-12);
    }

    #[test]
    fn biaxial_with_free_aspect_is_refused() {
        let modes = grid_modes();
        let j = biaxial_free_aspect_jacobian(&modes, 1e4, 1.1e4, 0.4, 0.3);
        let id = assess(&["ln Tx", "ln Ty", "ln Ly"], &j);
        assert_eq!(id.rank, 2);
        assert!(!id.identifiable && id.condition_number.is_infinite());
        let why = id.refusal().unwrap();
        assert!(why.contains("only 2 of the 3 parameters"), "{why}");
        assert_eq!(why.lines().count(), 1);
    }

    #[test]
    fn biaxial_from_diagonal_modes_only_is_refused() {
        // (m,m) modes see only A + B: rank 1.
        let modes = [(1, 1), (2, 2), (3, 3)];
        let id = assess(&["ln Tx", "ln Ty"], &two_term_jacobian(&modes, 1e4, 1.2e4));
        assert_eq!(id.rank, 1);
        assert!(id.refusal().is_some());
    }

    #[test]
    fn near_degenerate_set_exceeds_the_condition_threshold() {
        // Columns nearly parallel: κ of order 1e9.
        let j = DMatrix::from_row_slice(3, 2, &[1.0, 1.0, 1.0, 1.0 + 1e-9, 1.0, 1.0 - 1e-9]);
        let id = assess(&["a", "b"], &j);
        assert_eq!(id.rank, 2);
        assert!(id.condition_number > MAX_CONDITION);
        assert!(id.refusal().unwrap().contains("ill-conditioned"));
    }

    /// Through the pipeline: a biaxial fit of a synthetic mesh reports
    /// rank 2 of 2 and a modest condition number.
    #[test]
    fn pipeline_reports_the_biaxial_jacobian() {
        use crate::base::units::{KgPerM2, Meters, NewtonsPerMeter};
        use crate::physics::membrane::{Point, Shape};
        let shape = Shape::Rectangle {
            width: Meters(0.4),
            height: Meters(0.3),
        };
        let mut cfg = crate::physics::synth::SynthConfig::new(
            shape,
            KgPerM2(0.05),
            NewtonsPerMeter(2000.0),
            Point {
                u: 0.31,
                v: Some(0.27),
            },
        );
        cfg.tension_y = Some(NewtonsPerMeter(1800.0));
        let x = crate::physics::synth::synthesise(&cfg).unwrap();
        let rec = crate::signal::recording::Recording::from_samples(
            std::path::Path::new("mesh.wav"),
            x,
            cfg.sample_rate_hz as f64,
        );
        let spec = crate::physics::panel::PanelSpec {
            width: Some("400mm".into()),
            height: Some("300mm".into()),
            areal_density: Some("0.05kg/m2".into()),
            ..Default::default()
        };
        let panel = crate::physics::panel::Panel::from_spec(&spec).unwrap();
        let opts = crate::fitting::measurement::FitOptions {
            model: FitModel::Biaxial,
            ..Default::default()
        };
        let m = crate::fitting::pipeline::measure(&rec, &panel, &opts).unwrap();
        let id = m.identifiability.unwrap();
        assert_eq!((id.rank, id.parameters.len()), (2, 2));
        assert!(id.identifiable && id.condition_number < 10.0, "{id:?}");
    }
}
