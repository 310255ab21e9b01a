//! The tension pattern of a circular head from a round of taps, one near
//! each lug: the principal direction of uneven tension (and higher even
//! orders where the data carry them) from how strongly each member of a
//! split pair sounds at each tap, and each lug's deviation from the mean.
//!
//! Conventions: angles in degrees, measured in the head's own frame (the
//! first lug at the angle the user gives, lugs going round in the
//! direction the user gives, equally spaced); a pattern order p means a
//! rim tension T(θ) = T̄·(1 + Σ_p δ_p·cos p(θ − θ_p)) with δ_p ≥ 0 and θ_p
//! in [0°, 360°/p); member amplitudes are linear (from the refined
//! partials' initial levels, dB re full scale); uncertainties are
//! standard (k = 1).
//!
//! # Why taps at several angles fix the direction
//!
//! A circle mode of order m ≥ 1 is a degenerate pair. A perturbation that
//! splits it (a uniform biaxial stress for m = 1, the cos 2mθ part of a rim
//! tension pattern for m ≥ 2; derived in [`crate::physics::evenness`]) also picks
//! the members: their angular shapes are cos m(θ − α) and sin m(θ − α),
//! where α is fixed by the perturbation, not by the tap. Under the stress
//! Txx′ = T(1 + ε), Tyy′ = T(1 − ε) along axes turned by θ₀, the (1,n)
//! pair's perturbation matrix in the turned frame is the one derived in
//! [`crate::physics::evenness`] for θ₀ = 0, so the member cos(θ − θ₀) — moving
//! along the tighter axis — goes up to f₀·√(1 + ε/2) and sin(θ − θ₀) down
//! to f₀·√(1 − ε/2): α₁ = θ₀. For a pattern δ·cos 2m(θ − θ_2m) the
//! diagonal elements of the order-m pair are ±(δ/2)·I₋ (cos²mθ and sin²mθ
//! against cos 2mθ), so the member cos m(θ − θ_2m) is the upper one when
//! I₋ > 0 and the lower one when I₋ < 0: α_m = θ_2m, or θ_2m + 90°/m
//! ([`crate::physics::evenness::lug_split_coefficient`] carries the sign).
//!
//! A tap is a force at one point (r_t, φ). The response of each member is
//! its mode shape at the tap times its mode shape at the microphone times
//! the tap's strength (modal superposition; equal modal masses, as the
//! two members of a pair have):
//!
//! A_up(φ) = s·R(r_t)·|cos m(φ − α)|·P_up,   A_lo(φ) = s·R(r_t)·|sin m(φ − α)|·P_lo,
//!
//! with s the strength of this tap, R the radial shape (J_m(j·r/a), the
//! same for both members to first order in ε) and P_up, P_lo the members'
//! shapes at the microphone — common to every tap while the microphone
//! stays put. The ratio of the two members within one tap removes s and
//! R (a harder tap, or a tap a little further in, moves both alike):
//!
//! ψ(φ) = atan(A_lo/A_up) = atan(g·|tan m(φ − α)|),   g = P_lo/P_up.
//!
//! ψ runs from 0° (only the upper member sounds: the tap on its
//! antinode) to 90°. Over taps at three or more distinct values of mφ
//! (mod 180°) it determines α (mod 180°/m) and g; more pairs of the same
//! order share α and each has its own g. [`orientation`] fits α and
//! ln g_k to the measured ψ by least squares (grid over α, then
//! Gauss–Newton), with the standard uncertainty from the residual scatter,
//! u² = s²·(JᵀJ)⁻¹, s² = Σr²/(N − P) — the member levels come with no
//! uncertainty of their own, so the scatter is the only honest measure.
//! A tap in which one member only sounds (the pair not split there, the
//! single partial within a quarter of the split of one member's pooled
//! frequency) gives ψ = 0° or 90°.
//!
//! The frequencies give the size: ε from the (1,n) pairs (pooled over the
//! taps), δ_2m = split/|c(m,n)| for m ≥ 2. The amplitudes give the angle.
//!
//! # What cannot be seen
//!
//! A pattern order p moves the order-m pairs only when p = 2m (first
//! order), so odd orders — one side of the head tighter than the other
//! (p = 1), a three-fold pattern (p = 3) — leave every frequency where it
//! was: they are invisible to first order and are never reported as
//! measured. Even orders whose pairs were not resolved are not determined
//! either. The lugs' deviations are the sum of the determined orders only,
//! evaluated at the lugs, minus their mean over the lugs (an order p that
//! is a multiple of the lug count is the same at every lug and moves no
//! lug against another).
//!
//! # The rim tension at a lug
//!
//! The uniform stress above gives the radial stress n·T·n = T(1 + ε·cos
//! 2(φ − θ₀)) at the rim point φ, so δ₂ = ε and θ₂ = θ₀ exactly. For
//! p ≥ 4 the project's derivation takes an isotropic tension that varies
//! with θ only (see [`crate::physics::evenness`]); a real rim load of order p decays
//! towards the centre, so δ_p for p ≥ 4 is the equivalent amplitude of that
//! model, not a stress measured at the rim.

use crate::physics::evenness::{self, PairInput};
use serde::Serialize;

pub use crate::fitting::round_angle::{orientation, psi_model_deg, Refusal, SAME_DIRECTION_DEG};

/// A single partial within this fraction of a pair's split of one
/// member's pooled frequency is taken as that member sounding alone.
pub const ALONE_FRACTION_OF_SPLIT: f64 = 0.25;

/// What one tap says about one degenerate line of order m ≥ 1.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub enum LineObservation {
    /// Both members resolved.
    Split {
        /// Lower member, Hz, and its standard uncertainty.
        f_low_hz: f64,
        /// Standard uncertainty, Hz.
        f_low_u_hz: f64,
        /// Upper member, Hz.
        f_high_hz: f64,
        /// Standard uncertainty, Hz.
        f_high_u_hz: f64,
        /// Initial amplitude of the lower member, full-scale units.
        a_low: f64,
        /// Initial amplitude of the upper member.
        a_high: f64,
    },
    /// One partial on the line.
    Single {
        /// Frequency, Hz.
        f_hz: f64,
    },
}

/// The observations of one tap: its angle and, per degenerate line
/// (m, n), what was heard.
#[derive(Debug, Clone, Serialize)]
pub struct TapLines {
    /// Tap angle, degrees.
    pub angle_deg: f64,
    /// ((m, n), observation).
    pub lines: Vec<((u32, u32), LineObservation)>,
}

/// α of one order with its uncertainty.
#[derive(Debug, Clone, Serialize)]
pub struct Orientation {
    /// Orientation α of the upper member's cos m(θ − α), degrees in
    /// [0, 180/m).
    pub alpha_deg: f64,
    /// Standard uncertainty, degrees.
    pub alpha_u_deg: f64,
    /// Pickup ratio g = P_lo/P_up per pair, in the order of `pairs`.
    pub pickup_ratio: Vec<f64>,
    /// Pairs (m, n) that entered.
    pub pairs: Vec<(u32, u32)>,
    /// Points fitted (taps × pairs with a ψ).
    pub points: usize,
    /// Root-mean-square residual of ψ, degrees.
    pub rms_residual_deg: f64,
}

/// One order of the tension pattern.
#[derive(Debug, Clone, Serialize)]
pub struct PatternOrder {
    /// Angular order p of T̄·δ_p·cos p(θ − θ_p).
    pub order: u32,
    /// Order m = p/2 of the pairs that carry it.
    pub pair_order: u32,
    /// δ_p, % (for p = 2 this is ε of the principal tensions T̄(1 ± ε)).
    pub amplitude_pct: f64,
    /// Its standard uncertainty, percentage points.
    pub amplitude_u_pct: f64,
    /// Significant: amplitude above twice its uncertainty.
    pub significant: bool,
    /// θ_p, degrees in [0, 360/p): for p = 2 the tighter principal
    /// direction (mod 180°). None when the taps do not fix it.
    pub angle_deg: Option<f64>,
    /// Its standard uncertainty, degrees.
    pub angle_u_deg: Option<f64>,
    /// The orientation fit, when it ran.
    pub orientation: Option<Orientation>,
    /// Why the angle is not given, when it is not.
    pub angle_refused: Option<String>,
    /// Pairs (m, n) resolved in at least one tap.
    pub pairs: Vec<String>,
}

/// One lug's deviation from the mean tension.
#[derive(Debug, Clone, Serialize)]
pub struct LugDeviation {
    /// Lug number, 1 = the first lug tapped.
    pub lug: usize,
    /// Its angle, degrees.
    pub angle_deg: f64,
    /// Deviation from the mean, % of the mean tension.
    pub deviation_pct: f64,
    /// Standard uncertainty, percentage points.
    pub deviation_u_pct: f64,
}

/// The tension pattern of one round.
#[derive(Debug, Clone, Serialize)]
pub struct Pattern {
    /// Determined and undetermined even orders with resolved pairs.
    pub orders: Vec<PatternOrder>,
    /// Each lug's deviation from the mean, from the orders with an
    /// angle (None when no order has one).
    pub lugs: Option<Vec<LugDeviation>>,
    /// The orders 1..=lugs/2 that the lug deviations do not contain, each
    /// with why.
    pub not_determined: Vec<(u32, String)>,
    /// Present when no pair was resolved in any tap: why the unevenness
    /// cannot be measured from these taps.
    pub not_measurable: Option<String>,
    /// Pairs heard split but not used, each with why.
    pub set_aside: Vec<String>,
}

/// A pair (m, n) with its lower and upper member's pooled (frequency,
/// standard uncertainty), Hz.
type PooledPair = ((u32, u32), (f64, f64), (f64, f64));

/// Pools one member's frequency over taps: inverse-variance mean with an
/// uncertainty no smaller than the scatter s/√n.
fn pool(values: &[(f64, f64)]) -> (f64, f64) {
    let w: Vec<f64> = values
        .iter()
        .map(|&(_, u)| 1.0 / u.max(1e-9).powi(2))
        .collect();
    let sw: f64 = w.iter().sum();
    let mean = values.iter().zip(&w).map(|(v, w)| v.0 * w).sum::<f64>() / sw;
    let n = values.len() as f64;
    let mut u = (1.0 / sw).sqrt();
    if values.len() >= 2 {
        let m = values.iter().map(|v| v.0).sum::<f64>() / n;
        let s = (values.iter().map(|v| (v.0 - m).powi(2)).sum::<f64>() / (n - 1.0)).sqrt();
        u = u.max(s / n.sqrt());
    }
    (mean, u)
}

/// The orders 1..=N/2 of the lug pattern that no determined order
/// carries (an order p reaches the lugs as p mod N, or N − that), each
/// with why.
fn undetermined_orders(n_lugs: usize, orders: &[PatternOrder]) -> Vec<(u32, String)> {
    let half = (n_lugs / 2) as u32;
    let mut not_determined = Vec::new();
    for q in 1..=half.max(1) {
        // Orders whose pattern aliases onto q at the lugs: p ≡ ±q (mod N).
        let carried = orders.iter().any(|o| {
            let r = o.order as usize % n_lugs.max(1);
            (r == q as usize || n_lugs - r == q as usize) && o.angle_deg.is_some()
        });
        if carried {
            continue;
        }
        let why = if q % 2 == 1 {
            "odd order: it moves no pair's frequency to first order (one side tighter than the other for order 1), so no round of taps can see it in the frequencies".to_string()
        } else if let Some(o) = orders.iter().find(|o| o.order == q) {
            o.angle_refused
                .clone()
                .unwrap_or_else(|| "direction not fixed".into())
        } else {
            format!("no ({},n) pair was resolved", q / 2)
        };
        not_determined.push((q, why));
    }
    not_determined
}

/// Pairs split in at least this many taps enter the pattern: a degenerate
/// pair split by the head's tension is split at every tap that is not on
/// a node of one member, while two neighbouring lines or a noise peak that
/// looks like a pair in one tap do not repeat.
pub const MIN_SPLIT_TAPS: usize = 2;

/// Takes out of `resolved` the pairs split in fewer than
/// [`MIN_SPLIT_TAPS`] taps, and those of an order m above half the lug
/// count (their pattern order 2m exceeds the lug count: it varies between
/// the lugs, and at the lugs it would alias onto a lower order), and says
/// why.
fn set_aside_pairs(taps: &[TapLines], resolved: &mut Vec<(u32, u32)>) -> Vec<String> {
    let n_lugs = taps.len() as u32;
    let mut why = Vec::new();
    resolved.retain(|&(m, n)| {
        let count = taps
            .iter()
            .filter(|t| {
                t.lines
                    .iter()
                    .any(|(mn, o)| *mn == (m, n) && matches!(o, LineObservation::Split { .. }))
            })
            .count();
        if count < MIN_SPLIT_TAPS {
            why.push(format!(
                "({m},{n}): split in {count} tap only, not a pair the head's tension splits"
            ));
            false
        } else if 2 * m > n_lugs {
            why.push(format!(
                "({m},{n}): its pattern order {} is above the lug count {n_lugs}",
                2 * m
            ));
            false
        } else {
            true
        }
    });
    why
}

/// The tension pattern from a round of taps at `lug_angles_deg` (one
/// [`TapLines`] per lug, in the lugs' order). See the module
/// documentation.
/// Each resolved pair's members pooled over the taps that split it.
fn pool_pairs(taps: &[TapLines], resolved: &[(u32, u32)]) -> Vec<PooledPair> {
    let mut pooled: Vec<PooledPair> = Vec::new();
    for &(m, n) in resolved {
        let (mut lo, mut hi) = (Vec::new(), Vec::new());
        for t in taps {
            for (mn, o) in &t.lines {
                if let (
                    true,
                    LineObservation::Split {
                        f_low_hz,
                        f_low_u_hz,
                        f_high_hz,
                        f_high_u_hz,
                        ..
                    },
                ) = (*mn == (m, n), o)
                {
                    lo.push((*f_low_hz, *f_low_u_hz));
                    hi.push((*f_high_hz, *f_high_u_hz));
                }
            }
        }
        pooled.push(((m, n), pool(&lo), pool(&hi)));
    }
    pooled
}

/// The size of the order-m pattern: ε from the (1,n) pairs, or δ_2m =
/// split/|c(m,n)| pooled by inverse variance, with its uncertainty, %.
fn order_size(m: u32, ev: Option<&evenness::Evenness>) -> Option<(f64, f64)> {
    if m == 1 {
        match ev {
            Some(e) if e.pairs_used > 0 => Some((e.epsilon_pct, e.epsilon_u_pct)),
            _ => None,
        }
    } else {
        let vals: Vec<(f64, f64)> = ev
            .iter()
            .flat_map(|e| e.higher_order.iter())
            .filter(|h| h.m == m)
            .filter_map(|h| {
                let c = evenness::lug_split_coefficient(h.m, h.n).abs();
                (c > 1e-3).then(|| (h.split_pct / c, h.split_u_pct / c))
            })
            .collect();
        if vals.is_empty() {
            return None;
        }
        let w: Vec<f64> = vals.iter().map(|v| 1.0 / v.1.max(1e-9).powi(2)).collect();
        let sw: f64 = w.iter().sum();
        Some((
            vals.iter().zip(&w).map(|(v, w)| v.0 * w).sum::<f64>() / sw,
            (1.0 / sw).sqrt(),
        ))
    }
}

/// The points (pair index, tap angle, ψ) of one order's pairs.
fn psi_points(
    taps: &[TapLines],
    pairs_m: &[(u32, u32)],
    pooled: &[PooledPair],
) -> Vec<(usize, f64, f64)> {
    let mut points = Vec::new();
    for t in taps {
        for (k, &(mm, nn)) in pairs_m.iter().enumerate() {
            let Some((_, o)) = t.lines.iter().find(|(mn, _)| *mn == (mm, nn)) else {
                continue;
            };
            let (_, lo, hi) = pooled
                .iter()
                .find(|p| p.0 == (mm, nn))
                .copied()
                .unwrap_or_default();
            match *o {
                LineObservation::Split { a_low, a_high, .. } if a_low > 0.0 && a_high > 0.0 => {
                    points.push((k, t.angle_deg, a_low.atan2(a_high).to_degrees()));
                }
                LineObservation::Single { f_hz } => {
                    let gate = ALONE_FRACTION_OF_SPLIT * (hi.0 - lo.0).abs();
                    if (f_hz - hi.0).abs() < gate {
                        points.push((k, t.angle_deg, 0.0));
                    } else if (f_hz - lo.0).abs() < gate {
                        points.push((k, t.angle_deg, 90.0));
                    }
                }
                _ => {}
            }
        }
    }
    points
}

pub fn pattern(taps: &[TapLines]) -> Pattern {
    let n_lugs = taps.len();
    // Every degenerate line resolved in at least one tap.
    let mut resolved: Vec<(u32, u32)> = taps
        .iter()
        .flat_map(|t| t.lines.iter())
        .filter(|(_, o)| matches!(o, LineObservation::Split { .. }))
        .map(|(mn, _)| *mn)
        .filter(|(m, _)| *m >= 1)
        .collect();
    resolved.sort();
    resolved.dedup();
    let set_aside = set_aside_pairs(taps, &mut resolved);
    let half = (n_lugs / 2) as u32;
    if resolved.is_empty() {
        return Pattern {
            orders: Vec::new(),
            lugs: None,
            not_determined: (1..=half.max(1))
                .map(|p| (p, "no split pair resolved".to_string()))
                .collect(),
            not_measurable: Some(
                "unevenness not measurable from these taps: no degenerate pair was heard split into two members in two taps or more — an even head does not split its pairs, and a split smaller than about half the decay rate (0.5/τ) cannot be resolved; tap off the centre, let each tap ring at least 1 s, and record close to the head".into(),
            ),
            set_aside,
        };
    }
    let pooled = pool_pairs(taps, &resolved);
    let inputs: Vec<PairInput> = pooled
        .iter()
        .map(|&((m, n), lo, hi)| PairInput::new(m, n, lo.0, lo.1, hi.0, hi.1))
        .collect();
    let ev = evenness::circle_evenness(&inputs);
    let mut orders_m: Vec<u32> = resolved.iter().map(|p| p.0).collect();
    orders_m.dedup();
    let mut orders = Vec::new();
    for &m in &orders_m {
        let pairs_m: Vec<(u32, u32)> = resolved.iter().copied().filter(|p| p.0 == m).collect();
        let Some((amp, amp_u)) = order_size(m, ev.as_ref()) else {
            continue;
        };
        let points = psi_points(taps, &pairs_m, &pooled);
        let significant = amp > 2.0 * amp_u;
        let coef_sign = if m == 1 {
            1.0
        } else {
            evenness::lug_split_coefficient(m, pairs_m[0].1).signum()
        };
        let p = 2 * m;
        let fitted = if significant {
            orientation(m, pairs_m.len(), &points)
        } else {
            Err(format!(
                "the split of the order-{m} pairs ({amp:.2} ± {amp_u:.2} %) is not significant, so the members have no direction to find"
            ))
        };
        let (angle, angle_u, orient, refused) = match fitted {
            Ok((alpha, u, g, rms)) => {
                let quarter = if coef_sign >= 0.0 {
                    0.0
                } else {
                    90.0 / m as f64
                };
                let theta = (alpha + quarter).rem_euclid(360.0 / p as f64);
                (
                    Some(theta),
                    Some(u),
                    Some(Orientation {
                        alpha_deg: alpha,
                        alpha_u_deg: u,
                        pickup_ratio: g,
                        pairs: pairs_m.clone(),
                        points: points.len(),
                        rms_residual_deg: rms,
                    }),
                    None,
                )
            }
            Err(why) => (None, None, None, Some(why)),
        };
        orders.push(PatternOrder {
            order: p,
            pair_order: m,
            amplitude_pct: amp,
            amplitude_u_pct: amp_u,
            significant,
            angle_deg: angle,
            angle_u_deg: angle_u,
            orientation: orient,
            angle_refused: refused,
            pairs: pairs_m.iter().map(|(a, b)| format!("({a},{b})")).collect(),
        });
    }
    let lug_angles: Vec<f64> = taps.iter().map(|t| t.angle_deg).collect();
    let lugs = lug_deviations(&lug_angles, &orders);
    let not_determined = undetermined_orders(n_lugs, &orders);
    Pattern {
        orders,
        lugs,
        not_determined,
        not_measurable: None,
        set_aside,
    }
}

/// Each lug's deviation from the mean over the lugs of Σ δ_p·cos p(φ −
/// θ_p) over the orders with an angle (significant or not: a
/// non-significant order still carries its uncertainty), with
/// u² = Σ_p [(c_j − c̄)²·u(δ_p)² + (δ_p·p·(s_j − s̄))²·u(θ_p)²] (radians),
/// c = cos p(φ − θ_p), s = sin p(φ − θ_p), orders independent, plus
/// (δ_q² + u(δ_q)²)/2 for every order q without an angle. None when no
/// order has an angle and some order is significant (the size is known,
/// the lugs are not); all zero with their uncertainty when no order is
/// significant.
pub fn lug_deviations(angles_deg: &[f64], orders: &[PatternOrder]) -> Option<Vec<LugDeviation>> {
    let with_angle: Vec<&PatternOrder> = orders.iter().filter(|o| o.angle_deg.is_some()).collect();
    if with_angle.is_empty() && orders.iter().any(|o| o.significant) {
        return None;
    }
    let n = angles_deg.len() as f64;
    let mut dev = vec![0.0; angles_deg.len()];
    let mut var = vec![0.0; angles_deg.len()];
    for o in &with_angle {
        let p = o.order as f64;
        let th = o.angle_deg.unwrap_or(0.0);
        let d = o.amplitude_pct;
        let cs: Vec<f64> = angles_deg
            .iter()
            .map(|a| (p * (a - th)).to_radians().cos())
            .collect();
        let sn: Vec<f64> = angles_deg
            .iter()
            .map(|a| (p * (a - th)).to_radians().sin())
            .collect();
        let (cm, sm) = (cs.iter().sum::<f64>() / n, sn.iter().sum::<f64>() / n);
        let u_th = o.angle_u_deg.unwrap_or(0.0).to_radians();
        for j in 0..angles_deg.len() {
            dev[j] += d * (cs[j] - cm);
            var[j] +=
                ((cs[j] - cm) * o.amplitude_u_pct).powi(2) + (d * p * (sn[j] - sm) * u_th).powi(2);
        }
    }
    // Orders without an angle: their size bounds what they add to each
    // lug; it enters the uncertainty as a term of unknown phase (the rms
    // of cos over a turn, 1/√2), so a lug is called beyond the tolerance
    // only when it is beyond whatever that order's direction.
    for o in orders.iter().filter(|o| o.angle_deg.is_none()) {
        let extra = (o.amplitude_pct.powi(2) + o.amplitude_u_pct.powi(2)) / 2.0;
        var.iter_mut().for_each(|v| *v += extra);
    }
    Some(
        angles_deg
            .iter()
            .enumerate()
            .map(|(j, &a)| LugDeviation {
                lug: j + 1,
                angle_deg: a,
                deviation_pct: dev[j],
                deviation_u_pct: var[j].sqrt(),
            })
            .collect(),
    )
}

/// The angles of `lugs` equally spaced lugs, the first at `first_deg`,
/// going counter-clockwise (`clockwise` false) or clockwise, in [0, 360).
pub fn lug_angles(lugs: usize, first_deg: f64, clockwise: bool) -> Vec<f64> {
    let step = 360.0 / lugs.max(1) as f64;
    let sign = if clockwise { -1.0 } else { 1.0 };
    (0..lugs)
        .map(|j| (first_deg + sign * step * j as f64).rem_euclid(360.0))
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Noise-free ψ from the model is fitted back to α to rounding, for
    /// 6, 8 and 10 lugs and any α, with a pickup ratio off 1.
    #[test]
    fn orientation_round_trip() {
        for lugs in [6usize, 8, 10] {
            for alpha in [0.0, 17.0, 73.0, 151.0] {
                let pts: Vec<(usize, f64, f64)> = lug_angles(lugs, 10.0, false)
                    .into_iter()
                    .map(|phi| (0, phi, psi_model_deg(1, phi, alpha, 0.7)))
                    .collect();
                let (a, _, g, rms) = orientation(1, 1, &pts).unwrap();
                let d = (a - alpha + 90.0).rem_euclid(180.0) - 90.0;
                assert!(d.abs() < 1e-3, "{lugs} lugs, α {alpha}: {a}");
                assert!((g[0] - 0.7).abs() < 1e-4 && rms < 1e-3);
            }
        }
    }

    /// Every tap heard from one direction (order 3 with 6 lugs: 3·60° =
    /// 180°) leaves α undetermined, and the refusal says so.
    #[test]
    fn one_direction_is_refused() {
        let pts: Vec<(usize, f64, f64)> = lug_angles(6, 0.0, false)
            .into_iter()
            .map(|phi| (0, phi, psi_model_deg(3, phi, 5.0, 1.0)))
            .collect();
        let e = orientation(3, 1, &pts).unwrap_err();
        assert!(e.contains("1 distinct tap direction"), "{e}");
    }

    /// A two-percent biaxial pattern along 30°: the lugs of a six-lug
    /// head deviate by ε·(cos 2(φ − 30°) − mean), and order 1 and 3 are
    /// listed as not determined.
    #[test]
    fn lug_deviation_of_a_biaxial_pattern() {
        let angles = lug_angles(6, 0.0, false);
        let eps = 0.02f64;
        let taps: Vec<TapLines> = angles
            .iter()
            .map(|&phi| {
                let x = (phi - 30.0).to_radians();
                TapLines {
                    angle_deg: phi,
                    lines: vec![(
                        (1, 1),
                        LineObservation::Split {
                            f_low_hz: 100.0 * (1.0 - eps / 2.0).sqrt(),
                            f_low_u_hz: 0.01,
                            f_high_hz: 100.0 * (1.0 + eps / 2.0).sqrt(),
                            f_high_u_hz: 0.01,
                            a_low: x.sin().abs() + 0.01,
                            a_high: x.cos().abs() + 0.01,
                        },
                    )],
                }
            })
            .collect();
        let p = pattern(&taps);
        assert!(p.not_measurable.is_none());
        let o = &p.orders[0];
        assert_eq!(o.order, 2);
        assert!((o.amplitude_pct - 2.0).abs() < 1e-6);
        let th = o.angle_deg.unwrap();
        assert!((th - 30.0).abs() < 2.0, "{th}");
        let lugs = p.lugs.unwrap();
        for l in &lugs {
            let want = 2.0 * (2.0 * (l.angle_deg - 30.0)).to_radians().cos();
            assert!((l.deviation_pct - want).abs() < 0.1, "{l:?}");
        }
        let nd: Vec<u32> = p.not_determined.iter().map(|q| q.0).collect();
        assert_eq!(nd, vec![1, 3]);
    }

    #[test]
    fn no_pair_is_not_measurable() {
        let taps: Vec<TapLines> = lug_angles(8, 0.0, true)
            .into_iter()
            .map(|a| TapLines {
                angle_deg: a,
                lines: vec![((1, 1), LineObservation::Single { f_hz: 100.0 })],
            })
            .collect();
        let p = pattern(&taps);
        assert!(p.lugs.is_none() && p.orders.is_empty());
        assert!(p
            .not_measurable
            .unwrap()
            .starts_with("unevenness not measurable from these taps"));
    }

    #[test]
    fn clockwise_lugs() {
        let a = lug_angles(4, 90.0, true);
        assert_eq!(a, vec![90.0, 0.0, 270.0, 180.0]);
    }
}
