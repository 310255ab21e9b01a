//! Batch statistics for a line or a lab: mean, standard deviation,
//! process capability (Cp, Cpk), an individuals (X) control chart with its
//! moving-range chart, and histogram bins.
//!
//! # Conventions
//!
//! - Values are in whatever unit the caller uses (tensions in N/m for
//!   tonus); every result is in the same unit, indices are dimensionless.
//! - Values are taken in the order given (for the charts, time order).
//!   Functions return `None` for fewer values than they need or when any
//!   value is not finite, rather than skipping values, because skipping
//!   would change which points are consecutive.
//! - The standard deviation is the sample one, s = √(Σ(xᵢ − x̄)²/(n − 1)).
//! - Capability indices after the NIST/SEMATECH e-Handbook of Statistical
//!   Methods, §6.1.6 "What is Process Capability?": Cp = (USL − LSL)/(6σ),
//!   Cpk = min(USL − μ, μ − LSL)/(3σ). σ is estimated either by the sample
//!   standard deviation s ([`SigmaMethod::Overall`]; what AIAG calls
//!   Pp/Ppk) or by the moving range, σ̂ = MR̄/d₂ ([`SigmaMethod::MovingRange`],
//!   short-term, the usual choice for individuals data).
//! - Individuals chart after the NIST/SEMATECH e-Handbook §6.3.2.2
//!   "Individuals Control Charts" and Montgomery, *Introduction to
//!   Statistical Quality Control*, §6.4: MRᵢ = |xᵢ − xᵢ₋₁| (i ≥ 2),
//!   centre x̄, limits x̄ ± 3·MR̄/d₂ (3/d₂ = 2.6596, tabulated rounded as
//!   2.66); moving-range chart centre MR̄, upper limit D₄·MR̄, lower 0.
//! - Histogram bins are half-open [eᵢ, eᵢ₊₁) except the last, which also
//!   holds its right edge.

use serde::Serialize;

/// d₂ for ranges of n = 2 observations: the mean range of two independent
/// standard normal values, 2/√π = 1.128 (Montgomery, Appendix Table VI;
/// NIST e-Handbook §6.3.2.2).
pub const D2_N2: f64 = 1.128;
/// D₄ for n = 2: upper limit factor of the moving-range chart,
/// 1 + 3·d₃/d₂ = 3.267 (Montgomery, Appendix Table VI; NIST e-Handbook
/// §6.3.2.2).
pub const D4_N2: f64 = 3.267;
/// Width of the control limits in standard deviations (Shewhart's 3σ).
pub const CONTROL_SIGMAS: f64 = 3.0;

fn all_finite(x: &[f64]) -> bool {
    x.iter().all(|v| v.is_finite())
}

/// Arithmetic mean x̄ = Σxᵢ/n; `None` when empty or not all finite.
pub fn mean(x: &[f64]) -> Option<f64> {
    if x.is_empty() || !all_finite(x) {
        return None;
    }
    Some(x.iter().sum::<f64>() / x.len() as f64)
}

/// Sample standard deviation s = √(Σ(xᵢ − x̄)²/(n − 1)) (two passes, so
/// no cancellation); `None` for fewer than two values or non-finite ones.
pub fn std_dev(x: &[f64]) -> Option<f64> {
    if x.len() < 2 {
        return None;
    }
    let m = mean(x)?;
    let ss: f64 = x.iter().map(|v| (v - m) * (v - m)).sum();
    Some((ss / (x.len() - 1) as f64).sqrt())
}

/// Potential capability Cp = (USL − LSL)/(6σ), dimensionless; USL, LSL
/// the specification limits and σ the process standard deviation, all in
/// one unit (NIST/SEMATECH e-Handbook §6.1.6). Infinite or NaN when σ is 0.
pub fn cp(lsl: f64, usl: f64, sigma: f64) -> f64 {
    (usl - lsl) / (6.0 * sigma)
}

/// Capability with centring Cpk = min(USL − μ, μ − LSL)/(3σ),
/// dimensionless; μ the process mean (NIST/SEMATECH e-Handbook §6.1.6).
/// Negative when μ lies outside the limits.
pub fn cpk(lsl: f64, usl: f64, mu: f64, sigma: f64) -> f64 {
    (usl - mu).min(mu - lsl) / (3.0 * sigma)
}

/// How σ is estimated for the capability indices.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum SigmaMethod {
    /// Sample standard deviation s of all values (long-term; Pp/Ppk).
    Overall,
    /// Average moving range over d₂: σ̂ = MR̄/1.128 (short-term, within).
    MovingRange,
}

/// Capability of a batch against specification limits.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Capability {
    /// Number of values.
    pub n: usize,
    /// Mean μ, in the values' unit.
    pub mean: f64,
    /// Estimated σ, in the values' unit.
    pub sigma: f64,
    /// How σ was estimated.
    pub sigma_method: SigmaMethod,
    /// Lower specification limit used.
    pub lsl: f64,
    /// Upper specification limit used.
    pub usl: f64,
    /// Cp; `None` when σ is zero (all values equal).
    pub cp: Option<f64>,
    /// Cpk; `None` when σ is zero.
    pub cpk: Option<f64>,
}

/// Cp and Cpk of `values` against [lsl, usl].
///
/// `None` for fewer than two values, non-finite values or limits, or
/// `lsl ≥ usl`. The NIST handbook (§6.1.6) asks for about 50 independent
/// values for a meaningful index; the caller should show `n`.
pub fn capability(values: &[f64], lsl: f64, usl: f64, method: SigmaMethod) -> Option<Capability> {
    if !(lsl.is_finite() && usl.is_finite() && lsl < usl) || values.len() < 2 {
        return None;
    }
    let mu = mean(values)?;
    let sigma = match method {
        SigmaMethod::Overall => std_dev(values)?,
        SigmaMethod::MovingRange => average_moving_range(values)? / D2_N2,
    };
    let defined = sigma > 0.0;
    Some(Capability {
        n: values.len(),
        mean: mu,
        sigma,
        sigma_method: method,
        lsl,
        usl,
        cp: defined.then(|| cp(lsl, usl, sigma)),
        cpk: defined.then(|| cpk(lsl, usl, mu, sigma)),
    })
}

/// Moving ranges MRᵢ = |xᵢ − xᵢ₋₁| for i = 2..n (n − 1 values).
pub fn moving_ranges(x: &[f64]) -> Vec<f64> {
    x.windows(2).map(|w| (w[1] - w[0]).abs()).collect()
}

/// Average moving range MR̄ = Σ MRᵢ/(n − 1); `None` for fewer than two
/// values or non-finite ones.
pub fn average_moving_range(x: &[f64]) -> Option<f64> {
    if x.len() < 2 || !all_finite(x) {
        return None;
    }
    let mr = moving_ranges(x);
    Some(mr.iter().sum::<f64>() / mr.len() as f64)
}

/// One point of an individuals chart.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct ChartPoint {
    /// Position in the input, from 0.
    pub index: usize,
    /// The value.
    pub value: f64,
    /// |xᵢ − xᵢ₋₁|; `None` for the first point.
    pub moving_range: Option<f64>,
    /// The value is above the upper control limit.
    pub above_ucl: bool,
    /// The value is below the lower control limit.
    pub below_lcl: bool,
    /// The moving range is above the moving-range chart's upper limit.
    pub moving_range_above_ucl: bool,
}

impl ChartPoint {
    /// Any signal on this point.
    pub fn out_of_control(&self) -> bool {
        self.above_ucl || self.below_lcl || self.moving_range_above_ucl
    }
}

/// An individuals (X) chart with its moving-range (MR) chart.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct IndividualsChart {
    /// Centre line x̄.
    pub centre: f64,
    /// Average moving range MR̄ (centre of the MR chart).
    pub average_moving_range: f64,
    /// σ̂ = MR̄/d₂.
    pub sigma: f64,
    /// Upper control limit x̄ + 3·MR̄/d₂.
    pub ucl: f64,
    /// Lower control limit x̄ − 3·MR̄/d₂.
    pub lcl: f64,
    /// Upper limit of the MR chart, D₄·MR̄ (its lower limit is 0).
    pub moving_range_ucl: f64,
    /// Every point with its flags.
    pub points: Vec<ChartPoint>,
    /// Indices of points with any signal.
    pub out_of_control: Vec<usize>,
}

/// Builds an individuals chart from values in time order; the limits are
/// computed from the same values (a phase I chart, NIST e-Handbook
/// §6.3.2.2). Points exactly on a limit are not flagged.
///
/// `None` for fewer than two values or non-finite ones.
pub fn individuals_chart(values: &[f64]) -> Option<IndividualsChart> {
    let centre = mean(values)?;
    let mr_bar = average_moving_range(values)?;
    let sigma = mr_bar / D2_N2;
    let ucl = centre + CONTROL_SIGMAS * sigma;
    let lcl = centre - CONTROL_SIGMAS * sigma;
    let mr_ucl = D4_N2 * mr_bar;
    let points: Vec<ChartPoint> = values
        .iter()
        .enumerate()
        .map(|(i, &v)| {
            let mr = (i > 0).then(|| (v - values[i - 1]).abs());
            ChartPoint {
                index: i,
                value: v,
                moving_range: mr,
                above_ucl: v > ucl,
                below_lcl: v < lcl,
                moving_range_above_ucl: mr.is_some_and(|m| m > mr_ucl),
            }
        })
        .collect();
    let out_of_control = points
        .iter()
        .filter(|p| p.out_of_control())
        .map(|p| p.index)
        .collect();
    Some(IndividualsChart {
        centre,
        average_moving_range: mr_bar,
        sigma,
        ucl,
        lcl,
        moving_range_ucl: mr_ucl,
        points,
        out_of_control,
    })
}

/// Bin edges and counts.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Histogram {
    /// Bin edges, ascending, one more than `counts`.
    pub edges: Vec<f64>,
    /// Values per bin.
    pub counts: Vec<usize>,
    /// Values left out: outside the edges or not finite.
    pub left_out: usize,
}

/// A histogram of `bins` equal bins from the smallest to the largest
/// finite value (non-finite values are counted in `left_out`). When all
/// values are equal the single value is centred in bins spanning ±0.5 in
/// its unit, or ±0.5·|x|·1e-6 if that is wider.
///
/// `None` when `bins` is 0 or there is no finite value.
pub fn histogram(values: &[f64], bins: usize) -> Option<Histogram> {
    if bins == 0 {
        return None;
    }
    let finite = values.iter().copied().filter(|v| v.is_finite());
    let (lo, hi) = finite.fold(None, |acc: Option<(f64, f64)>, v| match acc {
        None => Some((v, v)),
        Some((lo, hi)) => Some((lo.min(v), hi.max(v))),
    })?;
    let (lo, hi) = if hi > lo {
        (lo, hi)
    } else {
        let half = 0.5f64.max(0.5e-6 * lo.abs());
        (lo - half, hi + half)
    };
    let step = (hi - lo) / bins as f64;
    let mut edges: Vec<f64> = (0..=bins).map(|i| lo + step * i as f64).collect();
    // The last edge exactly at the maximum, whatever the rounding of step.
    edges[bins] = hi;
    Some(histogram_with_edges(values, &edges))
}

/// Counts `values` into the bins given by ascending `edges` (at least
/// two). Values outside [first, last] and non-finite values go to
/// `left_out`. With fewer than two edges, or edges not strictly
/// ascending, every value is left out and there are no bins.
pub fn histogram_with_edges(values: &[f64], edges: &[f64]) -> Histogram {
    let valid = edges.len() >= 2 && all_finite(edges) && edges.windows(2).all(|w| w[0] < w[1]);
    if !valid {
        return Histogram {
            edges: Vec::new(),
            counts: Vec::new(),
            left_out: values.len(),
        };
    }
    let nb = edges.len() - 1;
    let mut counts = vec![0usize; nb];
    let mut left_out = 0;
    for &v in values {
        if !v.is_finite() || v < edges[0] || v > edges[nb] {
            left_out += 1;
            continue;
        }
        // First edge greater than v; the bin is the one before it.
        let k = edges.partition_point(|&e| e <= v);
        counts[k.saturating_sub(1).min(nb - 1)] += 1;
    }
    Histogram {
        edges: edges.to_vec(),
        counts,
        left_out,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// NIST/SEMATECH e-Handbook §6.3.2.2, "Example of individuals chart":
    /// flow rate of the first 10 batches of a new process.
    const NIST_FLOWRATE: [f64; 10] = [49.6, 47.6, 49.9, 51.3, 47.8, 51.2, 52.6, 52.4, 53.6, 52.1];

    #[test]
    fn capability_of_nist_6_1_6_example() {
        // NIST/SEMATECH e-Handbook §6.1.6: USL = 20, LSL = 8, μ = 16,
        // σ = 2 gives Cp = 12/12 = 1.0 and Cpk = min(4, 8)/6 = 0.6667.
        // Tolerance: Cp is exact; Cpk is compared with the handbook's four
        // decimals (and with 2/3 to rounding).
        assert!((cp(8.0, 20.0, 2.0) - 1.0).abs() < 1e-15);
        let k = cpk(8.0, 20.0, 16.0, 2.0);
        assert!((k - 0.6667).abs() < 5e-5, "{k}");
        assert!((k - 2.0 / 3.0).abs() < 1e-15, "{k}");
        // Centred at 14, Cpk equals Cp; at 12 the lower limit is the
        // nearer one, by 4 again.
        assert!((cpk(8.0, 20.0, 14.0, 2.0) - 1.0).abs() < 1e-15);
        assert!((cpk(8.0, 20.0, 12.0, 2.0) - 2.0 / 3.0).abs() < 1e-15);
        // Outside the limits Cpk is negative.
        assert!(cpk(8.0, 20.0, 22.0, 2.0) < 0.0);
    }

    #[test]
    fn mean_and_standard_deviation() {
        // 2, 4, 4, 4, 5, 5, 7, 9: mean 5, Σ(x − x̄)² = 32, s = √(32/7).
        // Tolerance: sums of small integers are exact; the root rounds.
        let x = [2.0, 4.0, 4.0, 4.0, 5.0, 5.0, 7.0, 9.0];
        assert!((mean(&x).unwrap() - 5.0).abs() < 1e-15);
        assert!((std_dev(&x).unwrap() - (32.0f64 / 7.0).sqrt()).abs() < 1e-14);
        assert_eq!(mean(&[]), None);
        assert_eq!(std_dev(&[1.0]), None);
        assert_eq!(std_dev(&[1.0, f64::NAN]), None);
    }

    #[test]
    fn individuals_chart_of_nist_6_3_2_2_example() {
        // Published: x̄ = 50.81, MR̄ = 1.8778, UCL = 55.8041,
        // LCL = 45.8159 (with 3/d₂, d₂ = 1.128), all points in control.
        // MR chart UCL = 3.267·1.8778 = 6.1347. Tolerance: half a unit in
        // the last published digit.
        let c = individuals_chart(&NIST_FLOWRATE).unwrap();
        assert!((c.centre - 50.81).abs() < 5e-3, "{}", c.centre);
        assert!((c.average_moving_range - 1.8778).abs() < 5e-5);
        assert!((c.ucl - 55.8041).abs() < 5e-5, "{}", c.ucl);
        assert!((c.lcl - 45.8159).abs() < 5e-5, "{}", c.lcl);
        assert!((c.moving_range_ucl - 6.1347).abs() < 5e-5);
        assert!(c.out_of_control.is_empty());
        assert_eq!(c.points[0].moving_range, None);
        assert!((c.points[1].moving_range.unwrap() - 2.0).abs() < 1e-12);
    }

    #[test]
    fn individuals_chart_flags_points_outside() {
        let mut x = NIST_FLOWRATE.to_vec();
        x.push(70.0); // a jump: far above, with a large moving range
        let c = individuals_chart(&x).unwrap();
        let last = c.points.last().unwrap();
        assert!(last.above_ucl && last.moving_range_above_ucl, "{c:?}");
        assert_eq!(c.out_of_control, vec![10]);
        let mut x = NIST_FLOWRATE.to_vec();
        x.push(40.0);
        let c = individuals_chart(&x).unwrap();
        assert!(c.points[10].below_lcl);
        assert!(individuals_chart(&[1.0]).is_none());
        assert!(individuals_chart(&[1.0, f64::INFINITY]).is_none());
    }

    #[test]
    fn capability_from_values() {
        let c = capability(&NIST_FLOWRATE, 45.0, 57.0, SigmaMethod::MovingRange).unwrap();
        // σ̂ = MR̄/d₂ = 1.87778/1.128 = 1.66469; Cp = 12/(6·1.66469).
        assert!((c.sigma - 1.877_777_8 / 1.128).abs() < 1e-6);
        assert!((c.cp.unwrap() - 12.0 / (6.0 * c.sigma)).abs() < 1e-12);
        assert!((c.cpk.unwrap() - (50.81 - 45.0) / (3.0 * c.sigma)).abs() < 1e-9);
        let o = capability(&NIST_FLOWRATE, 45.0, 57.0, SigmaMethod::Overall).unwrap();
        assert!((o.sigma - std_dev(&NIST_FLOWRATE).unwrap()).abs() < 1e-15);
        let flat = capability(&[3.0, 3.0, 3.0], 1.0, 5.0, SigmaMethod::Overall).unwrap();
        assert_eq!(flat.cp, None);
        assert!(capability(&NIST_FLOWRATE, 57.0, 45.0, SigmaMethod::Overall).is_none());
    }

    #[test]
    fn histogram_bins_and_counts() {
        let h = histogram(&[0.0, 1.0, 2.0, 3.0, 4.0, f64::NAN], 4).unwrap();
        assert_eq!(h.edges, vec![0.0, 1.0, 2.0, 3.0, 4.0]);
        // [0,1) [1,2) [2,3) [3,4]: the maximum falls in the last bin.
        assert_eq!(h.counts, vec![1, 1, 1, 2]);
        assert_eq!(h.left_out, 1);
        let h = histogram(&[7.0, 7.0], 3).unwrap();
        assert_eq!(h.counts.iter().sum::<usize>(), 2);
        assert!(h.edges[0] < 7.0 && *h.edges.last().unwrap() > 7.0);
        assert!(histogram(&[1.0], 0).is_none());
        assert!(histogram(&[f64::NAN], 3).is_none());
        let h = histogram_with_edges(&[-1.0, 0.5, 1.5, 9.0], &[0.0, 1.0, 2.0]);
        assert_eq!((h.counts.clone(), h.left_out), (vec![1, 1], 2));
        let h = histogram_with_edges(&[1.0], &[2.0, 1.0]);
        assert!(h.counts.is_empty() && h.left_out == 1);
    }

    #[test]
    fn histogram_matches_a_slow_reference() {
        // Fast bisection against a linear scan over the bins.
        let x: Vec<f64> = (0..500)
            .map(|i| ((i * 7919) % 1000) as f64 * 0.37 - 50.0)
            .collect();
        let h = histogram(&x, 13).unwrap();
        let mut slow = vec![0usize; 13];
        for &v in &x {
            let mut k = 12;
            for b in 0..13 {
                if v >= h.edges[b] && v < h.edges[b + 1] {
                    k = b;
                    break;
                }
            }
            slow[k] += 1;
        }
        assert_eq!(h.counts, slow);
        assert_eq!(h.left_out, 0);
    }
}
