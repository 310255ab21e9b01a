//! Settling the fit: whether an isotropic rectangle's modes agree with
//! its entered sides, which axis a biaxial fit's larger tension lies
//! along, and the residual of every assignment.

use crate::base::estimate::{Estimate, CENTS_PER_LN};
use crate::base::warning::Warning;
use crate::fitting::biaxial::{self, Biaxial, LevelObs};
use crate::fitting::fit::{self, FitModel, FitResult, Observation};
use crate::fitting::matching::Matching;
use crate::fitting::refining::Prepared;
use crate::physics::membrane::{ModeLine, Shape};
use crate::physics::panel::Panel;
use crate::signal::partials::Partial;

/// An isotropic rectangle: do the modes agree with the sides? A
/// significant free aspect widens the fit's uncertainty and, beyond 1 %,
/// pushes a warning naming the side that fits.
pub fn check_aspect(
    f: &mut FitResult,
    prep: &Prepared,
    lines: &[ModeLine],
    m: &Matching,
    parts: &[Partial],
    (lx, ly): (f64, f64),
    warnings: &mut Vec<Warning>,
) {
    // A split pair on a line of two modes ((m,n)/(n,m) of a square) enters
    // as its two members, the lower as the mode with more half-waves along
    // x: one consistent choice, since the swapped one only exchanges the
    // roles of the sides.
    let mut kept: Vec<Observation> = Vec::new();
    let outlier_obs: Vec<usize> = f.outliers.iter().map(|&k| prep.fit_idx[k]).collect();
    for i in (0..prep.obs.len()).filter(|i| !outlier_obs.contains(i) && !prep.uncalibrated[*i]) {
        let line = &lines[m.assignments[i].line];
        let pair = parts[m.assignments[i].partial].pair;
        match (pair, line.labels.as_slice()) {
            (Some(pr), [a, b]) if a.0 != b.0 => {
                let (hi_m, lo_m) = if a.0 > b.0 { (*a, *b) } else { (*b, *a) };
                for (fhz, mode) in [(pr.lower.frequency_hz, hi_m), (pr.upper.frequency_hz, lo_m)] {
                    kept.push(Observation {
                        frequency_hz: fhz,
                        factor: crate::physics::membrane::rect_mode_frequency_hz(
                            lx, ly, 1.0, mode.0, mode.1,
                        ),
                        mode,
                    });
                }
            }
            _ => kept.push(prep.obs[i].clone()),
        }
    }
    if let Some(check) = crate::fitting::aspect::check(&kept, lx, ly) {
        check.widen(f);
        if let Some(w) = check.warning(lx, ly) {
            warnings.push(w);
        }
    }
}

/// The biaxial fit's tensions along the axes. The swap (m,n) → (n,m) with
/// A ↔ B fits the frequencies equally; the levels at the tap and pickup
/// points may tell the two apart, and when they say the matcher's axis is
/// the wrong one, the labels of `prep.obs` and `lines` are swapped.
pub fn settle_axis(
    f: &mut FitResult,
    prep: &mut Prepared,
    lines: &mut [ModeLine],
    m: &Matching,
    parts: &[Partial],
    panel: &Panel,
) -> Option<Biaxial> {
    let (Some((mut p, mut cov)), Shape::Rectangle { width, height }) = (f.two_term, panel.shape)
    else {
        return None;
    };
    let levels: Vec<LevelObs> = prep
        .fit_idx
        .iter()
        .enumerate()
        .filter(|(k, _)| !f.outliers.contains(k))
        .map(|(_, &i)| LevelObs {
            mode: prep.obs[i].mode,
            frequency_hz: prep.obs[i].frequency_hz,
            level_db: parts[m.assignments[i].partial].level_db,
        })
        .collect();
    let axis = axis_tie_break(&levels, panel);
    if axis.swapped_from_matcher {
        p = [p[1], p[0]];
        cov = [cov[2], cov[1], cov[0]];
        f.two_term = Some((p, cov));
        for o in prep.obs.iter_mut() {
            o.mode = (o.mode.1, o.mode.0);
        }
        for l in lines.iter_mut() {
            for lab in l.labels.iter_mut() {
                *lab = (lab.1, lab.0);
            }
        }
    }
    let b = biaxial::from_two_term(p, cov, width.0, height.0, None);
    f.model = FitModel::Biaxial;
    f.effective_height_m = None;
    // The isotropic equivalent: c² = mean of Tx/σ and Ty/σ.
    let c2 = 0.5 * (b.tx_over_sigma.value + b.ty_over_sigma.value);
    let u_c2 = 0.5
        * (b.tx_over_sigma.standard_uncertainty.powi(2)
            + b.ty_over_sigma.standard_uncertainty.powi(2)
            + 2.0
                * b.correlation
                * b.tx_over_sigma.standard_uncertainty
                * b.ty_over_sigma.standard_uncertainty)
            .max(0.0)
            .sqrt();
    f.wave_speed = Estimate {
        value: c2.sqrt(),
        standard_uncertainty: 0.5 * u_c2 / c2.sqrt(),
    };
    let mut full =
        biaxial::from_two_term(p, cov, width.0, height.0, panel.areal_density.map(|s| s.0));
    full.axis = Some(axis);
    Some(full)
}

/// Residuals for every assignment (not only the fitted ones), with the
/// outliers and the crowded modes left out renumbered to the assignments.
pub fn residuals(f: &mut FitResult, prep: &Prepared) {
    let fr: &FitResult = f;
    f.residuals_cents = prep
        .obs
        .iter()
        .map(|o| CENTS_PER_LN * (o.frequency_hz / fit::predicted_hz(fr, o.factor, o.mode)).ln())
        .collect();
    f.outliers = f.outliers.iter().map(|&k| prep.fit_idx[k]).collect();
    f.left_out_crowded = (0..prep.obs.len())
        .filter(|i| !prep.fit_idx.contains(i))
        .collect();
}

/// The axis evidence for a biaxial labelling ([`crate::fitting::biaxial::axis_log10_lr`]):
/// swapped when the levels favour the swap decisively, not determined when
/// they cannot tell or the tap point is unknown.
fn axis_tie_break(
    levels: &[crate::fitting::biaxial::LevelObs],
    panel: &Panel,
) -> crate::fitting::biaxial::AxisEvidence {
    use crate::fitting::biaxial::{AxisEvidence, AxisVerdict, DECISIVE_LOG10_LR};
    let Some(tap) = panel.tap else {
        return AxisEvidence {
            verdict: AxisVerdict::NotDetermined,
            log10_likelihood_ratio: 0.0,
            swapped_from_matcher: false,
            modes_used: levels.len(),
            detail: "axis not determined: the tap point is not given (--tap-at); the swapped solution is reported beside".into(),
        };
    };
    let lr = crate::fitting::biaxial::axis_log10_lr(levels, &panel.shape, tap, panel.pickup);
    let swap = lr < -DECISIVE_LOG10_LR;
    let lr_reported = if swap { -lr } else { lr };
    if lr_reported > DECISIVE_LOG10_LR {
        AxisEvidence {
            verdict: AxisVerdict::Determined,
            log10_likelihood_ratio: lr_reported,
            swapped_from_matcher: swap,
            modes_used: levels.len(),
            detail: format!(
                "axis determined by the partial levels at the tap and pickup points: likelihood ratio 10^{lr_reported:.1} : 1 against the swapped labelling"
            ),
        }
    } else {
        AxisEvidence {
            verdict: AxisVerdict::NotDetermined,
            log10_likelihood_ratio: lr,
            swapped_from_matcher: false,
            modes_used: levels.len(),
            detail: format!(
                "axis not determined: the partial levels favour neither labelling (likelihood ratio 10^{lr:.1} : 1); tap off the diagonal or give a known axis, the swapped solution is reported beside"
            ),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    /// Levels of a square tapped at x = Lx/2 but labelled the swapped way
    /// ((2,1) for a partial that is really (1,2)): the tie-break swaps.
    #[test]
    fn tie_break_swaps_a_wrong_labelling() {
        let spec = crate::physics::panel::PanelSpec {
            width: Some("400mm".into()),
            height: Some("400mm".into()),
            tap_at: Some("0.5,0.31".into()),
            ..Default::default()
        };
        let panel = Panel::from_spec(&spec).unwrap();
        let tap = panel.tap.unwrap();
        let levels: Vec<crate::fitting::biaxial::LevelObs> =
            [(1, 1), (1, 2), (3, 1), (3, 2), (1, 3)]
                .iter()
                .map(|&(m, n)| {
                    let c = panel.shape.mode_shape(m, n, tap).abs();
                    // Reported with the swapped labels.
                    crate::fitting::biaxial::LevelObs {
                        mode: (n, m),
                        frequency_hz: 150.0 * ((m * m + n * n) as f64).sqrt(),
                        level_db: 20.0 * c.log10() - 30.0,
                    }
                })
                .collect();
        let ev = axis_tie_break(&levels, &panel);
        assert!(ev.swapped_from_matcher);
        assert_eq!(ev.verdict, crate::fitting::biaxial::AxisVerdict::Determined);
        assert!(ev.log10_likelihood_ratio > crate::fitting::biaxial::DECISIVE_LOG10_LR);
    }
}
