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
//! two-term fit of [`crate::fitting::fit::fit_free_aspect`]; this module turns it
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

use crate::base::estimate::Estimate;
use crate::physics::membrane::{Point, Shape};
use serde::Serialize;

/// Scatter of measured partial levels about the predicted coupling, dB
/// (standard deviation): modal masses, the tap's spectrum and the room
/// move levels by a few dB; an assumption, not a measured figure.
pub const LEVEL_SCATTER_DB: f64 = 3.0;
/// Predicted couplings below this (−30 dB re the largest) count as this,
/// so that one partial at a near-node cannot give unbounded evidence (the
/// tap point is known to a few millimetres only).
pub const COUPLING_FLOOR: f64 = 0.03;
/// log₁₀ of the likelihood ratio from which the levels decide the axis
/// (100 : 1).
pub const DECISIVE_LOG10_LR: f64 = 2.0;

/// Which labelling the partial levels support.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum AxisVerdict {
    /// The labelling as reported (after any swap) is supported.
    Determined,
    /// The levels cannot tell the two labellings apart.
    NotDetermined,
}

/// The tie-break between a labelling and its (m,n) → (n,m) swap.
#[derive(Debug, Clone, Serialize)]
pub struct AxisEvidence {
    /// Outcome.
    pub verdict: AxisVerdict,
    /// log₁₀ of L(reported labelling)/L(swapped labelling) from the levels.
    pub log10_likelihood_ratio: f64,
    /// The matcher's first labelling was replaced by its swap.
    pub swapped_from_matcher: bool,
    /// Partials used.
    pub modes_used: usize,
    /// What the verdict rests on, in words.
    pub detail: String,
}

/// One partial for the axis tie-break: its label, frequency and level.
#[derive(Debug, Clone, Copy)]
pub struct LevelObs {
    /// The mode (m, n) as labelled.
    pub mode: (u32, u32),
    /// Measured frequency, Hz.
    pub frequency_hz: f64,
    /// Measured level, dB.
    pub level_db: f64,
}

/// Most degree of the level trend in ln f fitted beside the couplings.
pub const LEVEL_TREND_DEGREE: usize = 2;

/// Residual sum of squares, dB², of levels against the predicted
/// couplings 20·log₁₀|φ(tap)·φ(pickup)| plus a smooth trend in frequency:
/// a polynomial in ln f of degree [`LEVEL_TREND_DEGREE`] (lower when few
/// partials), fitted by least squares. The trend carries what depends on
/// frequency alone — the tap's force spectrum, the decay that lowers a
/// partial's peak, the microphone — which falls by tens of dB across a
/// screen's band; a constant gain alone leaves that fall in the residuals,
/// where it can outweigh the coupling pattern the tie-break rests on.
fn level_misfit(levels: &[LevelObs], shape: &Shape, tap: Point, pickup: Option<Point>) -> f64 {
    let d: Vec<f64> = levels
        .iter()
        .map(|o| {
            let (m, n) = o.mode;
            let c = shape.mode_shape(m, n, tap)
                * pickup.map(|p| shape.mode_shape(m, n, p)).unwrap_or(1.0);
            o.level_db - 20.0 * c.abs().max(COUPLING_FLOOR).log10()
        })
        .collect();
    let x: Vec<f64> = levels
        .iter()
        .map(|o| o.frequency_hz.max(1e-9).ln())
        .collect();
    // Two partials per trend coefficient at least.
    let degree = LEVEL_TREND_DEGREE.min((levels.len() / 2).saturating_sub(1));
    trend_residual_ss(&x, &d, degree)
}

/// Σ residual² of a least-squares polynomial of `degree` in x (centred
/// and scaled first, so that the normal equations stay well conditioned).
fn trend_residual_ss(x: &[f64], y: &[f64], degree: usize) -> f64 {
    let n = x.len();
    if n == 0 {
        return 0.0;
    }
    let mean = x.iter().sum::<f64>() / n as f64;
    let spread = x.iter().map(|v| (v - mean).abs()).fold(0.0, f64::max);
    let t: Vec<f64> = x
        .iter()
        .map(|v| {
            if spread > 0.0 {
                (v - mean) / spread
            } else {
                0.0
            }
        })
        .collect();
    let cols = degree + 1;
    let a = nalgebra::DMatrix::from_fn(n, cols, |i, j| t[i].powi(j as i32));
    let b = nalgebra::DVector::from_column_slice(y);
    let coef = a
        .clone()
        .svd(true, true)
        .solve(&b, 1e-12)
        .unwrap_or_else(|_| nalgebra::DVector::zeros(cols));
    (b - a * coef).norm_squared()
}

/// Compares the labelling of `levels` with its swap (n, m) through the
/// expected amplitudes at the tap and pickup points. Both labellings
/// predict the same frequencies, so everything that depends on frequency
/// alone (tap spectrum, damping, microphone) is the same for both — a
/// smooth trend in frequency fitted for each — and only the mode shapes
/// at the two points differ. With Gaussian level errors of
/// [`LEVEL_SCATTER_DB`], ln L = −SS/(2·s²) + const, so
/// log₁₀ LR = (SS_swapped − SS_labelled)/(2·s²·ln 10).
/// Positive values favour the labelling as given.
pub fn axis_log10_lr(levels: &[LevelObs], shape: &Shape, tap: Point, pickup: Option<Point>) -> f64 {
    let swapped: Vec<LevelObs> = levels
        .iter()
        .map(|o| LevelObs {
            mode: (o.mode.1, o.mode.0),
            ..*o
        })
        .collect();
    let ss = level_misfit(levels, shape, tap, pickup);
    let ss_swapped = level_misfit(&swapped, shape, tap, pickup);
    (ss_swapped - ss) / (2.0 * LEVEL_SCATTER_DB.powi(2) * std::f64::consts::LN_10)
}

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
    /// Which labelling the levels support (set by the pipeline).
    pub axis: Option<AxisEvidence>,
}

/// Tensions from the two-term fit ((ln A, ln B), covariance).
pub fn from_two_term(p: [f64; 2], cov: [f64; 3], lx: f64, ly: f64, sigma: Option<f64>) -> Biaxial {
    let (a, b) = (p[0].exp(), p[1].exp());
    let tx = 4.0 * lx * lx * a;
    let ty = 4.0 * ly * ly * b;
    // The frequency method's common error (crate::fitting::fit::METHOD_CENTS on
    // every f, so twice that on ln A and ln B, fully correlated) is added;
    // it cancels in the ratio.
    let common =
        (2.0 * crate::fitting::fit::METHOD_CENTS / crate::base::estimate::CENTS_PER_LN).powi(2);
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
        axis: None,
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

    /// A partial of the 400 mm square at its ideal frequency (c = 100 m/s)
    /// with coupling `c` and a level trend falling 12 dB per octave (as a
    /// tap's force spectrum and damping make it) from `gain_db`.
    fn obs(mode: (u32, u32), c: f64, gain_db: f64) -> LevelObs {
        let f = 100.0 / (2.0 * 0.4) * ((mode.0 * mode.0 + mode.1 * mode.1) as f64).sqrt();
        LevelObs {
            mode,
            frequency_hz: f,
            level_db: gain_db + 20.0 * c.log10() - 40.0 * (f / 100.0).log10(),
        }
    }

    fn square() -> Shape {
        Shape::Rectangle {
            width: crate::base::units::Meters(0.4),
            height: crate::base::units::Meters(0.4),
        }
    }

    #[test]
    fn tap_on_the_centre_line_decides_the_axis() {
        // Tapped at x = Lx/2: every even-m mode is silent, so partials
        // labelled (1,2), (3,2), (1,4) at strong levels are consistent,
        // while their swaps (2,1), (2,3), (4,1) would be at nodes.
        let tap = Point {
            u: 0.5,
            v: Some(0.31),
        };
        let levels: Vec<LevelObs> = [(1, 1), (1, 2), (3, 1), (3, 2), (1, 3), (1, 4)]
            .iter()
            .map(|&(m, n)| obs((m, n), square().mode_shape(m, n, tap).abs(), -40.0))
            .collect();
        let lr = axis_log10_lr(&levels, &square(), tap, None);
        assert!(lr > DECISIVE_LOG10_LR, "{lr}");
        let swapped: Vec<_> = levels
            .iter()
            .map(|o| LevelObs {
                mode: (o.mode.1, o.mode.0),
                ..*o
            })
            .collect();
        assert!((axis_log10_lr(&swapped, &square(), tap, None) + lr).abs() < 1e-9);
    }

    #[test]
    fn tap_on_the_diagonal_cannot_tell() {
        // At x/Lx = y/Ly the mode shapes of (m,n) and (n,m) are equal.
        let tap = Point {
            u: 0.3,
            v: Some(0.3),
        };
        let levels = [
            obs((1, 2), 1.0, -40.0),
            obs((2, 1), 1.0, -43.0),
            obs((1, 3), 1.0, -45.0),
        ];
        assert!(axis_log10_lr(&levels, &square(), tap, None).abs() < 1e-9);
    }
}
