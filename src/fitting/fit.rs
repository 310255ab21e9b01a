//! Least-squares fit of the wave speed (and, on request, the effective
//! height of a rectangle) to the matched partials.
//!
//! Residuals are in log frequency (reported in cents, 1200·log2), because
//! the model's own errors — stiffness, air loading, uneven tension — scale
//! with frequency, so every mode gets equal weight in relative terms.
//!
//! - Isotropic wave speed: ln f_i = ln c + ln g_i is linear in ln c, so the
//!   estimate is the mean of ln(f_i/g_i), solved directly.
//! - Free aspect (rectangle): f² = A·m² + B·n² with A = c²/(4Lx²) and
//!   B = c²/(4Ly²); started from the linear least-squares solution in f²,
//!   then solved in log frequency by Gauss–Newton with a line search
//!   (`gauss_newton`: argmin's `GaussNewtonLS` with the Moré–Thuente
//!   line search; J. J. Moré and D. J. Thuente, "Line search algorithms
//!   with guaranteed sufficient decrease", ACM TOMS 20(3), 1994).
//!
//! Standard uncertainties come from the Jacobian J at the solution and the
//! residual scatter: cov = s²·(JᵀJ)⁻¹ with s² = Σr²/(N − p) (the usual
//! least-squares covariance; JCGM 100:2008 (GUM) §4.2 for the Type A
//! evaluation). s is floored at [`FREQUENCY_FLOOR_CENTS`] so a perfect fit
//! of synthetic data does not claim a precision the partials lack.
//! Outliers (a spurious peak that happens to sit near a line) are rejected
//! first: residuals beyond [`crate::base::estimate::OUTLIER_MADS`] scaled median absolute
//! deviations, and at least [`OUTLIER_MIN_CENTS`] from the median.

use crate::base::estimate::{outlier_limit, Estimate, CENTS_PER_LN};
use argmin::core::{Error as ArgminError, Executor, Jacobian, Operator, State};
use argmin::solver::gaussnewton::GaussNewtonLS;
use argmin::solver::linesearch::MoreThuenteLineSearch;
use nalgebra::{DMatrix, DVector};
use serde::Serialize;

/// Smallest scatter credited to the partial frequencies, cents.
pub const FREQUENCY_FLOOR_CENTS: f64 = 0.1;
/// Type B standard uncertainty of the partial-frequency method, common to
/// all modes, cents: the skirts of neighbouring partials pull FFT peak
/// estimates by amounts that do not average out over modes. Set from the
/// bias seen on synthetic panels and heads (`cargo run --release
/// --example fit_accuracy`), where the mean tension error stays within
/// about 0.02 %, i.e. 0.15 cents in c.
pub const METHOD_CENTS: f64 = 0.15;
/// Scatter assumed for a single mode, where none can be measured, cents.
pub const SINGLE_MODE_SCATTER_CENTS: f64 = 10.0;
/// Outlier threshold floor, cents.
pub const OUTLIER_MIN_CENTS: f64 = 3.0;
/// Most Gauss–Newton iterations of a nonlinear fit (`gauss_newton`).
pub const MAX_ITERATIONS: u64 = 30;
/// `gauss_newton` stops when the residual norm ‖r‖ (log frequency)
/// changes by less than this from one iteration to the next: about
/// 2·10⁻⁹ cents, far below any fit's scatter, so the parameters are
/// converged to a small fraction of their standard uncertainty.
pub const COST_TOLERANCE: f64 = 1e-12;

/// One matched partial, as the fit sees it.
#[derive(Debug, Clone, Serialize)]
pub struct Observation {
    /// Measured frequency, Hz.
    pub frequency_hz: f64,
    /// Frequency factor of the line, 1/m (f = c·g).
    pub factor: f64,
    /// Half-wave counts (m, n) of the line's first mode (for the aspect fit).
    pub mode: (u32, u32),
}

/// What was fitted.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum FitModel {
    /// Wave speed only, geometry as given.
    Isotropic,
    /// Wave speed and the rectangle's effective height (width as given).
    FreeAspect,
    /// Tensions along x and y (rectangle), f² = (Tx·(m/Lx)² + Ty·(n/Ly)²)/(4σ).
    Biaxial,
    /// Tension and bending stiffness of a simply supported rectangular
    /// plate ([`crate::physics::plate`]).
    Stiff,
    /// Wave speed with the air-loading correction of [`crate::physics::airload`]
    /// (needs the areal density).
    AirLoaded,
}

impl FitModel {
    /// The model named `name` as `tonus fit --model`, a panel file's
    /// `model` key and a specification's `model` key write it
    /// (`isotropic`, `free-aspect`, `biaxial`, `stiff` or `plate`, `air` or
    /// `air-loaded`); None for anything else.
    pub fn from_name(name: &str) -> Option<FitModel> {
        match name {
            "isotropic" => Some(FitModel::Isotropic),
            "free-aspect" => Some(FitModel::FreeAspect),
            "biaxial" => Some(FitModel::Biaxial),
            "stiff" | "plate" => Some(FitModel::Stiff),
            "air" | "air-loaded" => Some(FitModel::AirLoaded),
            _ => None,
        }
    }

    /// The name [`FitModel::from_name`] reads (the short form).
    pub fn name(self) -> &'static str {
        match self {
            FitModel::Isotropic => "isotropic",
            FitModel::FreeAspect => "free-aspect",
            FitModel::Biaxial => "biaxial",
            FitModel::Stiff => "stiff",
            FitModel::AirLoaded => "air",
        }
    }

    /// The model is defined on a rectangle only: biaxial tension (Tx, Ty
    /// along the sides), the simply supported plate, the free aspect
    /// ratio. `pipeline::measure` refuses these on a circle.
    pub fn needs_rectangle(self) -> bool {
        matches!(
            self,
            FitModel::FreeAspect | FitModel::Biaxial | FitModel::Stiff
        )
    }
}

/// The outcome of a fit.
#[derive(Debug, Clone, Serialize)]
pub struct FitResult {
    /// What was fitted.
    pub model: FitModel,
    /// Wave speed c, m/s.
    pub wave_speed: Estimate,
    /// Effective height Ly for [`FitModel::FreeAspect`], m.
    pub effective_height_m: Option<Estimate>,
    /// Residual per observation (same order), cents.
    pub residuals_cents: Vec<f64>,
    /// Observations left out as outliers (indices).
    pub outliers: Vec<usize>,
    /// Observations left out because their peak is shared with a
    /// neighbouring line (indices; set by the pipeline).
    pub left_out_crowded: Vec<usize>,
    /// Root-mean-square residual of the kept observations, cents.
    pub rms_residual_cents: f64,
    /// Observations kept.
    pub n_used: usize,
    /// Degrees of freedom N − p.
    pub dof: usize,
    /// Solver iterations (Gauss–Newton steps for the nonlinear fits).
    pub iterations: usize,
    /// Why the solver stopped.
    pub stop_reason: String,
    /// How the uncertainty was obtained.
    pub uncertainty_method: String,
    /// For the two-term fits (f² = A·m² + B·n²): (ln A, ln B) and their
    /// covariance [var ln A, cov, var ln B], A and B in Hz².
    pub two_term: Option<([f64; 2], [f64; 3])>,
    /// For the plate model: (T/σ, D/σ, Lx, Ly).
    pub plate: Option<(f64, f64, f64, f64)>,
}

/// Frequency the fitted model predicts for a line of factor g whose first
/// mode is (m, n): √(A·m² + B·n²) for the two-term fits, c·g otherwise.
pub fn predicted_hz(f: &FitResult, factor: f64, mode: (u32, u32)) -> f64 {
    if let Some((p, q, lx, ly)) = f.plate {
        return crate::physics::plate::frequency_hz(
            p,
            q,
            crate::physics::plate::k_squared(lx, ly, mode.0, mode.1),
        );
    }
    match f.two_term {
        Some((p, _)) => {
            let (m, n) = (mode.0 as f64, mode.1 as f64);
            (p[0].exp() * m * m + p[1].exp() * n * n).sqrt()
        }
        None => f.wave_speed.value * factor,
    }
}

fn ln_resid(o: &Observation, c: f64) -> f64 {
    (o.frequency_hz / (c * o.factor)).ln()
}

/// Indices of the observations kept after outlier rejection, given
/// residuals (any unit).
pub(crate) fn inliers(resid: &[f64]) -> Vec<usize> {
    if resid.len() < 4 {
        return (0..resid.len()).collect();
    }
    let Some((med, limit)) = outlier_limit(resid, OUTLIER_MIN_CENTS / CENTS_PER_LN) else {
        return Vec::new();
    };
    let keep: Vec<usize> = (0..resid.len())
        .filter(|&i| (resid[i] - med).abs() <= limit)
        .collect();
    // Never throw away more than a third: then the model, not a few
    // points, is the problem, and the residuals should show it.
    if keep.len() * 3 < resid.len() * 2 {
        (0..resid.len()).collect()
    } else {
        keep
    }
}

/// Fits the wave speed alone.
///
/// # Errors
/// None when `obs` is empty.
pub fn fit_isotropic(obs: &[Observation]) -> Option<FitResult> {
    if obs.is_empty() {
        return None;
    }
    let mean_over = |idx: &[usize]| {
        idx.iter()
            .map(|&i| (obs[i].frequency_hz / obs[i].factor).ln())
            .sum::<f64>()
            / idx.len() as f64
    };
    let all: Vec<usize> = (0..obs.len()).collect();
    let c0 = mean_over(&all).exp();
    let r0: Vec<f64> = obs.iter().map(|o| ln_resid(o, c0)).collect();
    let keep = inliers(&r0);
    let ln_c = mean_over(&keep);
    let c = ln_c.exp();
    let resid: Vec<f64> = obs.iter().map(|o| ln_resid(o, c)).collect();
    let n = keep.len();
    let ss: f64 = keep.iter().map(|&i| resid[i] * resid[i]).sum();
    let (s, method) = if n >= 2 {
        (
            (ss / (n - 1) as f64).sqrt().max(FREQUENCY_FLOOR_CENTS / CENTS_PER_LN),
            format!("residual scatter of {n} modes, s/√N (Type A), with {METHOD_CENTS} cents for the frequency method (Type B)"),
        )
    } else {
        (
            SINGLE_MODE_SCATTER_CENTS / CENTS_PER_LN,
            format!("single mode: assumed model scatter of {SINGLE_MODE_SCATTER_CENTS} cents"),
        )
    };
    // J = column of ones in ln c, so cov(ln c) = s²/N; the method's own
    // part adds in quadrature.
    let u_ln_c = (s * s / n as f64 + (METHOD_CENTS / CENTS_PER_LN).powi(2)).sqrt();
    Some(FitResult {
        model: FitModel::Isotropic,
        wave_speed: Estimate {
            value: c,
            standard_uncertainty: c * u_ln_c,
        },
        effective_height_m: None,
        residuals_cents: resid.iter().map(|r| r * CENTS_PER_LN).collect(),
        outliers: (0..obs.len()).filter(|i| !keep.contains(i)).collect(),
        left_out_crowded: Vec::new(),
        rms_residual_cents: (ss / n as f64).sqrt() * CENTS_PER_LN,
        n_used: n,
        dof: n.saturating_sub(1),
        iterations: 1,
        stop_reason: "closed form (linear in ln c)".into(),
        uncertainty_method: method,
        two_term: None,
        plate: None,
    })
}

/// The outcome of [`gauss_newton`].
pub(crate) struct Solved {
    /// The parameters with the smallest residual norm reached.
    pub param: DVector<f64>,
    /// Gauss–Newton iterations.
    pub iterations: usize,
    /// The solver and why it stopped, for the reports.
    pub stop_reason: String,
}

/// Nonlinear least squares min ‖r(p)‖² by argmin's Gauss–Newton with the
/// Moré–Thuente line search, from `start`, for at most
/// [`MAX_ITERATIONS`] iterations or until ‖r‖ changes by less than
/// [`COST_TOLERANCE`]. Should argmin report an error (a search direction
/// that is no descent direction, i.e. a start already at the minimum to
/// rounding), the start is returned, and the stop reason says so.
pub(crate) fn gauss_newton<O>(problem: O, start: DVector<f64>) -> Solved
where
    O: Operator<Param = DVector<f64>, Output = DVector<f64>>
        + Jacobian<Param = DVector<f64>, Jacobian = DMatrix<f64>>,
{
    const SOLVER: &str = "argmin Gauss–Newton with Moré–Thuente line search";
    let run = || -> Result<_, ArgminError> {
        let solver =
            GaussNewtonLS::new(MoreThuenteLineSearch::new()).with_tolerance(COST_TOLERANCE)?;
        Executor::new(problem, solver)
            .configure(|s| s.param(start.clone()).max_iters(MAX_ITERATIONS))
            .timer(false)
            .run()
    };
    match run() {
        Ok(result) => {
            let state = result.state();
            Solved {
                param: state
                    .get_best_param()
                    .cloned()
                    .unwrap_or_else(|| start.clone()),
                iterations: state.get_iter() as usize,
                stop_reason: format!(
                    "{SOLVER}: {}",
                    state.get_termination_status().to_string().to_lowercase()
                ),
            }
        }
        Err(e) => Solved {
            param: start,
            iterations: 0,
            stop_reason: format!("{SOLVER}: stopped at the start ({e})"),
        },
    }
}

/// Log-frequency residuals of f² = A·m² + B·n², parameters (ln A, ln B).
#[derive(Clone, Copy)]
struct AspectProblem<'a> {
    obs: &'a [&'a Observation],
}

impl Operator for AspectProblem<'_> {
    type Param = DVector<f64>;
    type Output = DVector<f64>;

    fn apply(&self, p: &DVector<f64>) -> Result<DVector<f64>, ArgminError> {
        let (a, b) = (p[0].exp(), p[1].exp());
        Ok(DVector::from_iterator(
            self.obs.len(),
            self.obs.iter().map(|o| {
                let (m, n) = (o.mode.0 as f64, o.mode.1 as f64);
                o.frequency_hz.ln() - 0.5 * (a * m * m + b * n * n).ln()
            }),
        ))
    }
}

impl Jacobian for AspectProblem<'_> {
    type Param = DVector<f64>;
    type Jacobian = DMatrix<f64>;

    fn jacobian(&self, p: &DVector<f64>) -> Result<DMatrix<f64>, ArgminError> {
        let (a, b) = (p[0].exp(), p[1].exp());
        let mut j = DMatrix::zeros(self.obs.len(), 2);
        for (i, o) in self.obs.iter().enumerate() {
            let (m, n) = (o.mode.0 as f64, o.mode.1 as f64);
            let s = a * m * m + b * n * n;
            // r = ln f − ½ ln(e^α m² + e^β n²): ∂r/∂α = −½·A m²/s.
            j[(i, 0)] = -0.5 * a * m * m / s;
            j[(i, 1)] = -0.5 * b * n * n / s;
        }
        Ok(j)
    }
}

/// Fits wave speed and effective height of a rectangle of known width.
/// Needs modes with at least two different (m/n) mixes; returns None
/// otherwise.
pub fn fit_free_aspect(obs: &[Observation], width_m: f64) -> Option<FitResult> {
    if obs.len() < 3 {
        return None;
    }
    // Linear start: f² = A m² + B n², each row weighted by 1/f² so that the
    // residuals are relative.
    let solve = |idx: &[usize]| -> Option<(f64, f64)> {
        let (mut saa, mut sab, mut sbb, mut sa, mut sb) = (0.0, 0.0, 0.0, 0.0, 0.0);
        for &i in idx {
            let o = &obs[i];
            let w = 1.0 / o.frequency_hz.powi(2);
            let (x, y) = ((o.mode.0 as f64).powi(2) * w, (o.mode.1 as f64).powi(2) * w);
            let t = o.frequency_hz.powi(2) * w;
            saa += x * x;
            sab += x * y;
            sbb += y * y;
            sa += x * t;
            sb += y * t;
        }
        let det = saa * sbb - sab * sab;
        if det.abs() <= 1e-12 * saa * sbb {
            return None;
        }
        let a = (sa * sbb - sb * sab) / det;
        let b = (saa * sb - sab * sa) / det;
        (a > 0.0 && b > 0.0).then_some((a, b))
    };
    let all: Vec<usize> = (0..obs.len()).collect();
    let (a0, b0) = solve(&all)?;
    let r0: Vec<f64> = obs
        .iter()
        .map(|o| {
            let (m, n) = (o.mode.0 as f64, o.mode.1 as f64);
            o.frequency_hz.ln() - 0.5 * (a0 * m * m + b0 * n * n).ln()
        })
        .collect();
    let keep = inliers(&r0);
    let (a1, b1) = solve(&keep).unwrap_or((a0, b0));
    let kept: Vec<&Observation> = keep.iter().map(|&i| &obs[i]).collect();
    let problem = AspectProblem { obs: &kept };
    let solved = gauss_newton(problem, DVector::from_vec(vec![a1.ln(), b1.ln()]));
    let r = problem.apply(&solved.param).ok()?;
    let j = problem.jacobian(&solved.param).ok()?;
    let n = keep.len();
    let ss = r.norm_squared();
    let s2 = (ss / (n as f64 - 2.0).max(1.0)).max((FREQUENCY_FLOOR_CENTS / CENTS_PER_LN).powi(2));
    let cov = (j.transpose() * &j).try_inverse()? * s2;
    let (la, lb) = (solved.param[0], solved.param[1]);
    // c = 2·Lx·√A; Ly = Lx·√(A/B).
    let c = 2.0 * width_m * (0.5 * la).exp();
    let ly = width_m * (0.5 * (la - lb)).exp();
    let u_ln_c = (0.25 * cov[(0, 0)] + (METHOD_CENTS / CENTS_PER_LN).powi(2)).sqrt();
    let var_ln_ly = 0.25 * (cov[(0, 0)] + cov[(1, 1)] - 2.0 * cov[(0, 1)]);
    let resid_all: Vec<f64> = obs
        .iter()
        .map(|o| {
            let (m, nn) = (o.mode.0 as f64, o.mode.1 as f64);
            (o.frequency_hz.ln() - 0.5 * (la.exp() * m * m + lb.exp() * nn * nn).ln())
                * CENTS_PER_LN
        })
        .collect();
    Some(FitResult {
        model: FitModel::FreeAspect,
        wave_speed: Estimate {
            value: c,
            standard_uncertainty: c * u_ln_c,
        },
        effective_height_m: Some(Estimate {
            value: ly,
            standard_uncertainty: ly * var_ln_ly.max(0.0).sqrt(),
        }),
        residuals_cents: resid_all,
        outliers: (0..obs.len()).filter(|i| !keep.contains(i)).collect(),
        left_out_crowded: Vec::new(),
        rms_residual_cents: (ss / n as f64).sqrt() * CENTS_PER_LN,
        n_used: n,
        dof: n.saturating_sub(2),
        iterations: solved.iterations,
        stop_reason: solved.stop_reason,
        uncertainty_method: format!("s²(JᵀJ)⁻¹ at the solution, {n} modes, 2 parameters (Type A)"),
        two_term: Some(([la, lb], [cov[(0, 0)], cov[(0, 1)], cov[(1, 1)]])),
        plate: None,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::base::estimate::assert_same_estimate;
    use crate::physics::membrane::rect_mode_frequency_hz;
    use crate::physics::synth::Rng;

    fn rect_obs(lx: f64, ly: f64, c: f64, noise_cents: f64, seed: u64) -> Vec<Observation> {
        let mut rng = Rng::new(seed);
        let mut v = Vec::new();
        for m in 1..=4 {
            for n in 1..=3 {
                let f = rect_mode_frequency_hz(lx, ly, c, m, n);
                let f_noisy = f * (noise_cents * rng.normal() / CENTS_PER_LN).exp();
                v.push(Observation {
                    frequency_hz: f_noisy,
                    factor: rect_mode_frequency_hz(lx, 0.3, 1.0, m, n),
                    mode: (m, n),
                });
            }
        }
        v
    }

    #[test]
    fn isotropic_round_trip_within_uncertainty() {
        // 12 modes with 3 cents of scatter. u comes from the residual
        // scatter (11 degrees of freedom) with the 0.15-cent method term
        // added, so ±2u is about ±2.03 standard errors of Student's t with
        // 11 dof: coverage p = 0.933. Over 200 seeds the count inside is
        // binomial(200, 0.933); its central 99.9 % range is 174..=197
        // (computed exactly). An inflated uncertainty puts nearly all 200
        // inside and fails, as does one too small.
        let mut inside = 0;
        for seed in 0..200 {
            let obs = rect_obs(0.4, 0.3, 98.0, 3.0, seed);
            let f = fit_isotropic(&obs).unwrap();
            if (f.wave_speed.value - 98.0).abs() <= 2.0 * f.wave_speed.standard_uncertainty {
                inside += 1;
            }
        }
        assert!((174..=197).contains(&inside), "{inside}/200");
    }

    #[test]
    fn outlier_is_rejected() {
        let mut obs = rect_obs(0.4, 0.3, 98.0, 0.5, 3);
        obs[5].frequency_hz *= (25.0 / CENTS_PER_LN).exp();
        let f = fit_isotropic(&obs).unwrap();
        assert_eq!(f.outliers, vec![5]);
        assert!((f.wave_speed.value / 98.0 - 1.0).abs() < 5e-4);
    }

    #[test]
    fn free_aspect_recovers_the_height() {
        // True height 0.31 m while the nominal lines assume 0.30 m.
        let obs = rect_obs(0.4, 0.31, 98.0, 1.0, 7);
        let f = fit_free_aspect(&obs, 0.4).unwrap();
        let ly = f.effective_height_m.unwrap();
        assert!(
            (ly.value - 0.31).abs() < 3.0 * ly.standard_uncertainty,
            "{ly:?}"
        );
        assert!((f.wave_speed.value - 98.0).abs() < 3.0 * f.wave_speed.standard_uncertainty);
    }

    #[test]
    fn aspect_jacobian_matches_finite_differences() {
        let obs = rect_obs(0.4, 0.3, 98.0, 2.0, 1);
        let refs: Vec<&Observation> = obs.iter().collect();
        let p = AspectProblem { obs: &refs };
        let base = DVector::from_vec(vec![10.0, 11.0]);
        let j = p.jacobian(&base).unwrap();
        let h = 1e-6;
        for k in 0..2 {
            let mut hi = base.clone();
            hi[k] += h;
            let r_hi = p.apply(&hi).unwrap();
            let mut lo = base.clone();
            lo[k] -= h;
            let r_lo = p.apply(&lo).unwrap();
            for i in 0..obs.len() {
                let fd = (r_hi[i] - r_lo[i]) / (2.0 * h);
                // Central differences are good to O(h²) ≈ 1e-12 here;
                // 1e-8 leaves room for rounding in the logs.
                assert!((fd - j[(i, k)]).abs() < 1e-8, "{fd} vs {}", j[(i, k)]);
            }
        }
    }

    #[test]
    fn free_aspect_agrees_with_the_levenberg_marquardt_fit() {
        // Expected values: printed by the Levenberg–Marquardt fit (the
        // `levenberg-marquardt` crate, tonus at 92fca9e, before the move to
        // argmin) on these same inputs. Over 2,000 random problems (0.3 to
        // 30 cents of scatter, outliers) the two solvers differed by at
        // most 2·10⁻⁶ standard uncertainties.
        let mut with_outlier = rect_obs(0.4, 0.3, 98.0, 4.0, 11);
        with_outlier[3].frequency_hz *= (30.0 / CENTS_PER_LN).exp();
        type Case = (Vec<Observation>, [f64; 4], [f64; 2], [f64; 3], Vec<usize>);
        let cases: [Case; 2] = [
            (
                rect_obs(0.4, 0.31, 98.0, 1.0, 7),
                [
                    98.02642727574595,
                    0.04039157937544851,
                    0.31013477576000475,
                    0.00021511661526898933,
                ],
                [9.61676131942092, 10.125676486608151],
                [
                    6.491054353926081e-7,
                    -3.4770025131692376e-7,
                    5.799455569421522e-7,
                ],
                vec![],
            ),
            (
                with_outlier,
                [
                    98.07441321614345,
                    0.1465057571537865,
                    0.3005794743008696,
                    0.0007349592328819574,
                ],
                [9.61774012076078, 10.189244829866173],
                [
                    8.895993359935353e-6,
                    -4.244949120065603e-6,
                    6.52896881548693e-6,
                ],
                vec![3],
            ),
        ];
        for (obs, [c, u_c, ly, u_ly], ln_ab, cov, outliers) in cases {
            let f = fit_free_aspect(&obs, 0.4).unwrap();
            assert_same_estimate("c", f.wave_speed, c, u_c);
            assert_same_estimate("Ly", f.effective_height_m.unwrap(), ly, u_ly);
            let (p, q) = f.two_term.unwrap();
            for k in 0..2 {
                let u = q[2 * k].sqrt();
                assert!((p[k] - ln_ab[k]).abs() < 0.01 * u, "{p:?} vs {ln_ab:?}");
            }
            for k in 0..3 {
                assert!((q[k] / cov[k] - 1.0).abs() < 1e-3, "{q:?} vs {cov:?}");
            }
            assert_eq!(f.outliers, outliers);
            assert!(
                f.stop_reason.starts_with("argmin Gauss–Newton")
                    && f.stop_reason.ends_with("converged"),
                "{}",
                f.stop_reason
            );
            assert!(
                (1..=MAX_ITERATIONS as usize).contains(&f.iterations),
                "{}",
                f.iterations
            );
        }
    }

    #[test]
    fn gauss_newton_reaches_the_minimum_from_a_poor_start() {
        // Started half a neper away in each parameter (A and B off by
        // factors of 1.6), the line search still lands on the minimum the
        // linear start leads to.
        let obs = rect_obs(0.4, 0.31, 98.0, 3.0, 2);
        let refs: Vec<&Observation> = obs.iter().collect();
        let problem = AspectProblem { obs: &refs };
        let near = fit_free_aspect(&obs, 0.4).unwrap().two_term.unwrap();
        let far = gauss_newton(
            problem,
            DVector::from_vec(vec![near.0[0] + 0.5, near.0[1] - 0.5]),
        );
        assert!(
            far.stop_reason.ends_with("converged"),
            "{}",
            far.stop_reason
        );
        for k in 0..2 {
            let u = near.1[2 * k].sqrt();
            assert!(
                (far.param[k] - near.0[k]).abs() < 0.01 * u,
                "{} vs {}",
                far.param[k],
                near.0[k]
            );
        }
    }
}
