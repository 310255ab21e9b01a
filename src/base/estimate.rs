//! The shared value-with-uncertainty type, the cents constants, and the
//! one outlier screen (median and scaled median absolute deviation) used
//! by the mode fits and by the taps of a file.

use serde::Serialize;

/// Cents per natural-log unit of frequency ratio (1200/ln 2).
pub const CENTS_PER_LN: f64 = 1200.0 / std::f64::consts::LN_2;

/// Outlier threshold in scaled median absolute deviations.
pub const OUTLIER_MADS: f64 = 5.0;

/// A value with its standard uncertainty.
#[derive(Debug, Clone, Copy, Serialize)]
pub struct Estimate {
    /// Best estimate.
    pub value: f64,
    /// Standard uncertainty (k = 1).
    pub standard_uncertainty: f64,
}

/// The median of `values` and the outlier limit around it: [`OUTLIER_MADS`]
/// times 1.4826·MAD (which estimates the standard deviation of a normal
/// sample), but never below `floor`. A value further than the limit from
/// the median is an outlier. None for an empty slice.
pub fn outlier_limit(values: &[f64], floor: f64) -> Option<(f64, f64)> {
    if values.is_empty() {
        return None;
    }
    let mut sorted = values.to_vec();
    sorted.sort_by(f64::total_cmp);
    let med = sorted[sorted.len() / 2];
    let mut dev: Vec<f64> = values.iter().map(|r| (r - med).abs()).collect();
    dev.sort_by(f64::total_cmp);
    Some((med, (OUTLIER_MADS * 1.4826 * dev[dev.len() / 2]).max(floor)))
}

/// For tests comparing a solver with the values of the one it replaced:
/// |new − old| < 0.01·u and the uncertainty itself within 0.1 %.
#[cfg(test)]
pub fn assert_same_estimate(what: &str, new: Estimate, value: f64, u: f64) {
    assert!(
        (new.value - value).abs() < 0.01 * u,
        "{what}: {} vs {value} (u {u})",
        new.value
    );
    assert!(
        (new.standard_uncertainty / u - 1.0).abs() < 1e-3,
        "{what}: u {} vs {u}",
        new.standard_uncertainty
    );
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_screen_marks_one_far_value() {
        // Median 10; deviations 0.1, 0, 0, 0.1, 5 → MAD 0.1, limit
        // 5·1.4826·0.1 = 0.7413: 15 is out, 9.9 and 10.1 are in.
        let (med, limit) = outlier_limit(&[9.9, 10.0, 10.0, 10.1, 15.0], 0.0).unwrap();
        assert_eq!(med, 10.0);
        assert!((limit - 0.7413).abs() < 1e-12, "{limit}");
        let (_, floored) = outlier_limit(&[1.0, 1.0, 1.0], 0.5).unwrap();
        assert_eq!(floored, 0.5);
        assert!(outlier_limit(&[], 0.0).is_none());
    }
}
