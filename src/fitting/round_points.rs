//! Taps at several points of a rectangular panel or screen (`tonus round
//! --points`): each tap fitted with the biaxial model and its own tap
//! point, the axis evidence of the taps summed in one orientation, and Tx,
//! Ty combined over the taps in that orientation.
//!
//! Orientation. The biaxial fit f² = A·m² + B·n² (A = Tx/(4σLx²),
//! B = Ty/(4σLy²)) explains the frequencies equally under the swap
//! (m,n) ↔ (n,m), A ↔ B; the two solutions differ in which of A and B is
//! the larger. So every tap's solution is put in one orientation, "A > B"
//! (the frequencies climb faster with m than with n; on a square, Tx > Ty),
//! which is the same statement whatever labelling a tap's own matcher
//! chose. A tap whose reported solution has A > B votes +log₁₀LR for it,
//! otherwise −log₁₀LR, where log₁₀LR is its own level evidence for its
//! reported labelling against the swap ([`crate::fitting::biaxial`]). The
//! taps are independent recordings, so their log likelihood ratios add;
//! the sum decides the orientation when it exceeds
//! [`DECISIVE_LOG10_LR`] in size.
//!
//! Combination. In the chosen orientation each tap gives (Tx, Ty): its
//! reported solution, or its swapped one (Tx' = 4Lx²B, Ty' = 4Ly²A, so
//! the relative uncertainties trade places), and its anisotropy
//! 100·(Tx − Ty)/((Tx + Ty)/2) with the tap's own correlation of Tx and
//! Ty. Each is combined by the inverse-variance weighted mean. Its
//! uncertainty does not shrink as 1/√N: the taps share the frequency
//! method (Type B) and the model, and on synthetic meshes every tap of a
//! panel erred the same way (Tx a little low, Ty a little high), so the
//! taps' errors are taken as fully correlated, u = Σwᵢuᵢ/Σwᵢ — the
//! conservative limit — unless the independent 1/√Σwᵢ scaled by the
//! Birge ratio √(χ²/(N − 1)) (taps scattering more than their own
//! uncertainties say) is larger.
//!
//! Conventions: tensions in N/m, or T/σ in m²/s² without an areal density;
//! points as fractions of width (x) and height (y).

use crate::base::estimate::Estimate;
use crate::fitting::biaxial::{AxisVerdict, DECISIVE_LOG10_LR};
use crate::fitting::quality::Grade;
use serde::Serialize;

/// A tap whose value lies further than this many combined standard
/// uncertainties from the combined value is flagged.
pub const DISAGREE_Z: f64 = 3.0;

/// One tap of a panel, fitted.
#[derive(Debug, Clone, Serialize)]
pub struct PointTap {
    /// Tap number, 1 = first.
    pub tap: usize,
    /// Tap point, fractions of width and height.
    pub x: f64,
    /// See `x`.
    pub y: f64,
    /// Onset in the recording, s.
    pub onset_s: f64,
    /// Grade of the tap's fit.
    pub grade: Grade,
    /// The tap's reported (Tx, Ty) with their uncertainties and
    /// correlation; None when the biaxial fit failed.
    pub reported: Option<(Estimate, Estimate, f64)>,
    /// The reported solution's swapped twin (Tx, Ty).
    pub swapped: Option<(f64, f64)>,
    /// log₁₀ L(reported)/L(swapped) from this tap's levels.
    pub log10_lr: f64,
    /// The tap's reported solution has A > B (see the module doc).
    pub a_over_b: bool,
    /// The tap's vote for A > B: ±`log10_lr`.
    pub vote: f64,
    /// Taken into the combination (graded sound or fair, fitted).
    pub used: bool,
}

impl PointTap {
    /// The tap from its measurement; `lx`, `ly` the sides, m.
    pub fn from_measurement(
        tap: usize,
        point: (f64, f64),
        onset_s: f64,
        m: &crate::fitting::pipeline::Measurement,
        lx: f64,
        ly: f64,
    ) -> PointTap {
        let b = m.biaxial.as_ref();
        let reported = b.map(|b| {
            (
                b.tension_x.unwrap_or(b.tx_over_sigma),
                b.tension_y.unwrap_or(b.ty_over_sigma),
                b.correlation,
            )
        });
        let log10_lr = b
            .and_then(|b| b.axis.as_ref())
            .map(|a| a.log10_likelihood_ratio)
            .unwrap_or(0.0);
        let a_over_b = reported
            .map(|(tx, ty, _)| tx.value / (lx * lx) > ty.value / (ly * ly))
            .unwrap_or(true);
        let grade = m.quality.grade;
        PointTap {
            tap,
            x: point.0,
            y: point.1,
            onset_s,
            grade,
            reported,
            swapped: b.map(|b| b.swapped),
            log10_lr,
            a_over_b,
            vote: if a_over_b { log10_lr } else { -log10_lr },
            used: reported.is_some() && grade < Grade::Doubtful,
        }
    }

    /// (Tx, Ty, correlation) in the orientation `a_over_b`.
    pub fn oriented(&self, a_over_b: bool) -> Option<(Estimate, Estimate, f64)> {
        let (tx, ty, r) = self.reported?;
        if a_over_b == self.a_over_b {
            return Some((tx, ty, r));
        }
        let (sx, sy) = self.swapped?;
        Some((
            Estimate {
                value: sx,
                standard_uncertainty: sx * ty.standard_uncertainty / ty.value,
            },
            Estimate {
                value: sy,
                standard_uncertainty: sy * tx.standard_uncertainty / tx.value,
            },
            r,
        ))
    }
}

/// Tx and Ty combined over the taps in one orientation.
#[derive(Debug, Clone, Serialize)]
pub struct Combined {
    /// The orientation: A > B (see the module doc).
    pub a_over_b: bool,
    /// Tension along the width, N/m (or m²/s²).
    pub tension_x: Estimate,
    /// Tension along the height.
    pub tension_y: Estimate,
    /// 100·(Tx − Ty)/((Tx + Ty)/2), %.
    pub anisotropy_percent: Estimate,
    /// Birge ratio √(χ²/(N − 1)) of Tx and of Ty (1 for one tap).
    pub birge: (f64, f64),
    /// Taps whose Tx or Ty lies more than [`DISAGREE_Z`] combined
    /// uncertainties from the combined value.
    pub outlying_taps: Vec<usize>,
}

/// The panel's result.
#[derive(Debug, Clone, Serialize)]
pub struct PointsResult {
    /// Every tap in order.
    pub taps: Vec<PointTap>,
    /// "N/m" or "m2/s2".
    pub unit: &'static str,
    /// Σ of the used taps' votes: log₁₀ L(A > B)/L(A < B).
    pub log10_lr_sum: f64,
    /// Determined when |sum| > [`DECISIVE_LOG10_LR`].
    pub verdict: AxisVerdict,
    /// Used taps whose vote has the sign of the sum.
    pub agreeing: usize,
    /// Taps used.
    pub used: usize,
    /// The orientation the sum favours (or A > B at a tie).
    pub chosen: Option<Combined>,
    /// The other orientation, given only when the axis is not determined.
    pub other: Option<Combined>,
    /// Used taps whose vote goes against the sum, in words.
    pub disagreeing: Vec<String>,
    /// Taps left out, with why.
    pub left_out: Vec<String>,
}

/// Weighted mean of `vals`: (mean, u, Birge ratio). The weights are
/// 1/uᵢ²; u is the larger of the fully correlated Σwᵢuᵢ/Σwᵢ and the
/// independent 1/√Σwᵢ scaled by the Birge ratio (see the module doc).
fn weighted(vals: &[Estimate]) -> Option<(f64, f64, f64)> {
    let w: Vec<f64> = vals
        .iter()
        .map(|e| 1.0 / e.standard_uncertainty.max(1e-300).powi(2))
        .collect();
    let sw: f64 = w.iter().sum();
    if !(sw.is_finite() && sw > 0.0) {
        return None;
    }
    let mean = vals.iter().zip(&w).map(|(e, w)| w * e.value).sum::<f64>() / sw;
    let birge = if vals.len() >= 2 {
        let chi2: f64 = vals
            .iter()
            .zip(&w)
            .map(|(e, w)| w * (e.value - mean).powi(2))
            .sum();
        (chi2 / (vals.len() - 1) as f64).sqrt().max(1.0)
    } else {
        1.0
    };
    let correlated = vals
        .iter()
        .zip(&w)
        .map(|(e, w)| w * e.standard_uncertainty)
        .sum::<f64>()
        / sw;
    Some((mean, correlated.max(birge / sw.sqrt()), birge))
}

/// One tap's anisotropy 100·(Tx − Ty)/((Tx + Ty)/2) with its uncertainty
/// from Tx, Ty and their correlation.
fn anisotropy(tx: Estimate, ty: Estimate, r: f64) -> Estimate {
    let s = tx.value + ty.value;
    let (da, db) = (400.0 * ty.value / (s * s), -400.0 * tx.value / (s * s));
    let (ux, uy) = (tx.standard_uncertainty, ty.standard_uncertainty);
    let var = da * da * ux * ux + db * db * uy * uy + 2.0 * da * db * r * ux * uy;
    Estimate {
        value: 200.0 * (tx.value - ty.value) / s,
        standard_uncertainty: var.max(0.0).sqrt(),
    }
}

/// Tx and Ty over the used taps in orientation `a_over_b`.
pub fn combine(taps: &[PointTap], a_over_b: bool) -> Option<Combined> {
    let used: Vec<(usize, (Estimate, Estimate, f64))> = taps
        .iter()
        .filter(|t| t.used)
        .filter_map(|t| t.oriented(a_over_b).map(|o| (t.tap, o)))
        .collect();
    let xs: Vec<Estimate> = used.iter().map(|(_, o)| o.0).collect();
    let ys: Vec<Estimate> = used.iter().map(|(_, o)| o.1).collect();
    let an: Vec<Estimate> = used
        .iter()
        .map(|(_, o)| anisotropy(o.0, o.1, o.2))
        .collect();
    let (tx, ux, bx) = weighted(&xs)?;
    let (ty, uy, by) = weighted(&ys)?;
    let (a, ua, _) = weighted(&an)?;
    let outlying_taps = used
        .iter()
        .filter(|(_, o)| {
            let z = |e: Estimate, m: f64| (e.value - m).abs() / e.standard_uncertainty;
            z(o.0, tx) > DISAGREE_Z || z(o.1, ty) > DISAGREE_Z
        })
        .map(|(k, _)| *k)
        .collect();
    Some(Combined {
        a_over_b,
        tension_x: Estimate {
            value: tx,
            standard_uncertainty: ux,
        },
        tension_y: Estimate {
            value: ty,
            standard_uncertainty: uy,
        },
        anisotropy_percent: Estimate {
            value: a,
            standard_uncertainty: ua,
        },
        birge: (bx, by),
        outlying_taps,
    })
}

/// Concludes the panel from its fitted taps.
pub fn conclude(taps: Vec<PointTap>, unit: &'static str) -> PointsResult {
    let used: Vec<&PointTap> = taps.iter().filter(|t| t.used).collect();
    let sum: f64 = used.iter().map(|t| t.vote).sum();
    let a_over_b = sum >= 0.0;
    let determined = !used.is_empty() && sum.abs() > DECISIVE_LOG10_LR;
    let agreeing = used
        .iter()
        .filter(|t| (t.vote >= 0.0) == a_over_b && t.vote != 0.0)
        .count();
    let disagreeing = used
        .iter()
        .filter(|t| t.vote != 0.0 && (t.vote > 0.0) != a_over_b)
        .map(|t| {
            format!(
                "tap {} at ({:.2}, {:.2}) favours the other axis by 10^{:.1} : 1{}",
                t.tap,
                t.x,
                t.y,
                t.vote.abs(),
                if t.vote.abs() > DECISIVE_LOG10_LR {
                    " (decisive on its own: check its point and its labels)"
                } else {
                    ""
                }
            )
        })
        .collect();
    let left_out = taps
        .iter()
        .filter(|t| !t.used)
        .map(|t| {
            if t.reported.is_none() {
                format!("tap {}: no biaxial fit", t.tap)
            } else {
                format!("tap {}: fit graded {}", t.tap, t.grade.name())
            }
        })
        .collect();
    let chosen = combine(&taps, a_over_b);
    let other = if determined {
        None
    } else {
        combine(&taps, !a_over_b)
    };
    PointsResult {
        unit,
        log10_lr_sum: sum,
        verdict: if determined {
            AxisVerdict::Determined
        } else {
            AxisVerdict::NotDetermined
        },
        agreeing,
        used: used.len(),
        chosen,
        other,
        disagreeing,
        left_out,
        taps,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn tap(k: usize, tx: f64, ty: f64, lr: f64) -> PointTap {
        let e = |v: f64| Estimate {
            value: v,
            standard_uncertainty: v * 2e-4,
        };
        PointTap {
            tap: k,
            x: 0.3,
            y: 0.2,
            onset_s: 0.0,
            grade: Grade::Sound,
            reported: Some((e(tx), e(ty), 0.5)),
            swapped: Some((ty, tx)),
            log10_lr: lr,
            a_over_b: tx > ty,
            vote: if tx > ty { lr } else { -lr },
            used: true,
        }
    }

    #[test]
    fn votes_add_in_one_orientation_and_swapped_taps_are_turned() {
        // Square: tap 2 reported the twin with weak evidence for it.
        let r = conclude(
            vec![
                tap(1, 2100.0, 1900.0, 5.0),
                tap(2, 1900.0, 2100.0, 1.0),
                tap(3, 2100.0, 1900.0, 3.0),
            ],
            "N/m",
        );
        assert!((r.log10_lr_sum - 7.0).abs() < 1e-12);
        assert_eq!(r.verdict, AxisVerdict::Determined);
        assert_eq!((r.agreeing, r.used), (2, 3));
        assert_eq!(r.disagreeing.len(), 1);
        let c = r.chosen.unwrap();
        assert!((c.tension_x.value - 2100.0).abs() < 1e-9);
        assert!((c.tension_y.value - 1900.0).abs() < 1e-9);
        assert!((c.anisotropy_percent.value - 10.0).abs() < 1e-9);
        assert!(r.other.is_none());
    }

    #[test]
    fn weak_evidence_leaves_both_solutions() {
        let r = conclude(
            vec![tap(1, 2100.0, 1900.0, 1.0), tap(2, 2100.0, 1900.0, 0.5)],
            "N/m",
        );
        assert_eq!(r.verdict, AxisVerdict::NotDetermined);
        let o = r.other.unwrap();
        assert!((o.tension_x.value - 1900.0).abs() < 1e-9);
    }
}
