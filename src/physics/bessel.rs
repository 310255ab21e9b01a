//! Bessel functions of the first kind and their zeros, computed here (no
//! pasted table).
//!
//! J_m(x) comes from Bessel's integral
//! J_m(x) = (1/π) ∫₀^π cos(mτ − x·sin τ) dτ
//! (DLMF 10.9.2), evaluated by the trapezoidal rule. The integrand is
//! smooth and, extended to [−π, π], even and 2π-periodic, so the rule
//! converges geometrically: with M points per period its error is of the
//! order of J_{M−m}(x), negligible once M exceeds m + x by a few tens
//! (Trefethen & Weideman, "The exponentially convergent trapezoidal rule",
//! SIAM Review 56(3), 2014, section 3).
//!
//! Zeros j_{m,n} (n = 1, 2, … counts the positive zeros) are bracketed by a
//! scan and polished by Newton's method with J_m′ = (J_{m−1} − J_{m+1})/2
//! (DLMF 10.6.1), falling back to bisection if a step leaves the bracket.
//! Consecutive zeros are at least 2.9 apart for every m (DLMF 10.21(i):
//! spacing tends to π, from below for m = 0 and from above for m ≥ 1).

use std::collections::HashMap;
use std::sync::{Mutex, OnceLock};

/// J_m(x) for integer order m ≥ 0 and x ≥ 0.
pub fn bessel_j(m: u32, x: f64) -> f64 {
    let mf = m as f64;
    let points = ((mf + x.abs()) / 2.0).ceil() as usize + 24;
    let h = std::f64::consts::PI / points as f64;
    let mut sum = 0.0;
    for i in 0..=points {
        let tau = i as f64 * h;
        let v = (mf * tau - x * tau.sin()).cos();
        sum += if i == 0 || i == points { 0.5 * v } else { v };
    }
    sum * h / std::f64::consts::PI
}

/// dJ_m/dx.
pub fn bessel_j_prime(m: u32, x: f64) -> f64 {
    if m == 0 {
        -bessel_j(1, x)
    } else {
        0.5 * (bessel_j(m - 1, x) - bessel_j(m + 1, x))
    }
}

fn cache() -> &'static Mutex<HashMap<u32, Vec<f64>>> {
    static CACHE: OnceLock<Mutex<HashMap<u32, Vec<f64>>>> = OnceLock::new();
    CACHE.get_or_init(|| Mutex::new(HashMap::new()))
}

/// The n-th positive zero j_{m,n} of J_m (n ≥ 1). Results are cached.
///
/// # Panics
/// If `n` is 0.
pub fn bessel_zero(m: u32, n: u32) -> f64 {
    assert!(n >= 1, "zeros are counted from 1");
    zeros_below(m, 0.0, n as usize)[n as usize - 1]
}

/// The first zeros of J_m: all below `x_max`, but at least `at_least`.
pub fn zeros_below(m: u32, x_max: f64, at_least: usize) -> Vec<f64> {
    let mut guard = cache().lock().unwrap_or_else(|e| e.into_inner());
    let mut out = Vec::new();
    for k in 0.. {
        let z = zero_at(&mut guard, m, k);
        if !(z < x_max || k < at_least) {
            break;
        }
        out.push(z);
    }
    out
}

/// The (k+1)-th positive zero of J_m, computed and cached as needed.
/// Zeros of consecutive orders interlace (DLMF 10.21.2:
/// j_{m−1,n} < j_{m,n} < j_{m−1,n+1}) and consecutive zeros of one order
/// are more than 2.9 apart, so for m ≥ 1 the next zero lies above both
/// j_{m−1,k+1} and j_{m,k} + 2.9; a scan from there in steps of 1 (below
/// the spacing, so it cannot step over two zeros) brackets it. J_0's
/// zeros come from the finer scan of [`next_zero`].
fn zero_at(map: &mut HashMap<u32, Vec<f64>>, m: u32, k: usize) -> f64 {
    loop {
        let have = map.get(&m).map_or(0, |l| l.len());
        if have > k {
            return map[&m][k];
        }
        let previous = map.get(&m).and_then(|l| l.last()).copied();
        let z = if m == 0 {
            next_zero(0, previous.map_or(1e-3, |z| z + 2.9))
        } else {
            let lower = zero_at(map, m - 1, have);
            let mut a = previous.map_or(lower, |z| lower.max(z + 2.9));
            let mut fa = bessel_j(m, a);
            loop {
                let b = a + 1.0;
                let fb = bessel_j(m, b);
                if fa == 0.0 {
                    break a;
                }
                if fa * fb <= 0.0 {
                    break bracketed_zero(m, a, b, fa, fb);
                }
                a = b;
                fa = fb;
            }
        };
        map.entry(m).or_default().push(z);
    }
}

/// J_m(x) and J_{m−1}(x) (m ≥ 1) from one pass of the trapezoidal rule
/// of [`bessel_j`]: cos((m−1)τ − x·sin τ) = cos(θ)·cos τ + sin(θ)·sin τ
/// with θ = mτ − x·sin τ.
fn bessel_j_and_lower(m: u32, x: f64) -> (f64, f64) {
    let mf = m as f64;
    let points = ((mf + x.abs()) / 2.0).ceil() as usize + 24;
    let h = std::f64::consts::PI / points as f64;
    let (mut sm, mut sl) = (0.0, 0.0);
    for i in 0..=points {
        let tau = i as f64 * h;
        let (st, ct) = tau.sin_cos();
        let (sth, cth) = (mf * tau - x * st).sin_cos();
        let w = if i == 0 || i == points { 0.5 } else { 1.0 };
        sm += w * cth;
        sl += w * (cth * ct + sth * st);
    }
    (sm * h / std::f64::consts::PI, sl * h / std::f64::consts::PI)
}

/// The zero of J_m (m ≥ 1) in (a, b), where J_m changes sign once:
/// Newton's method with J_m′ = J_{m−1} − (m/x)·J_m (DLMF 10.6.2),
/// started by the secant through the ends and kept inside the bracket
/// (bisection when a step would leave it).
fn bracketed_zero(m: u32, mut a: f64, mut b: f64, mut fa: f64, fb: f64) -> f64 {
    let mut x = if fa != fb {
        (a - fa * (b - a) / (fb - fa)).clamp(a, b)
    } else {
        0.5 * (a + b)
    };
    for _ in 0..60 {
        let (fx, lower) = bessel_j_and_lower(m, x);
        if fx == 0.0 {
            return x;
        }
        if fa * fx < 0.0 {
            b = x;
        } else {
            a = x;
            fa = fx;
        }
        let d = lower - m as f64 / x * fx;
        let newton = x - fx / d;
        let next = if d != 0.0 && newton > a && newton < b {
            newton
        } else {
            0.5 * (a + b)
        };
        if (next - x).abs() <= 1e-15 * x.abs() || (b - a) <= 1e-15 * x.abs() {
            return next;
        }
        x = next;
    }
    x
}

/// The first zero of J_m above `start` (no zero lies in [start − 2.9, start)
/// other than the previous one).
fn next_zero(m: u32, start: f64) -> f64 {
    let step = 0.25;
    let mut a = start;
    let mut fa = bessel_j(m, a);
    loop {
        let b = a + step;
        let fb = bessel_j(m, b);
        if fa == 0.0 {
            return a;
        }
        if fa * fb <= 0.0 {
            return polish(m, a, b, fa);
        }
        a = b;
        fa = fb;
    }
}

fn polish(m: u32, mut a: f64, mut b: f64, mut fa: f64) -> f64 {
    let mut x = 0.5 * (a + b);
    for _ in 0..60 {
        let fx = bessel_j(m, x);
        if fx == 0.0 {
            return x;
        }
        if fa * fx < 0.0 {
            b = x;
        } else {
            a = x;
            fa = fx;
        }
        let d = bessel_j_prime(m, x);
        let newton = x - fx / d;
        let next = if d != 0.0 && newton > a && newton < b {
            newton
        } else {
            0.5 * (a + b)
        };
        // Converged to the last bits of a double.
        // J carries rounding of about 1e−15 (a sum of ~100 cosines), so
        // x is known to about 1e−14: stop at a step of 1e−13.
        if (next - x).abs() <= 1e-13 * x.abs().max(1.0) || (b - a) <= 1e-15 * x.abs() {
            return next;
        }
        x = next;
    }
    x
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Zeros as printed in M. Abramowitz and I. A. Stegun, "Handbook of
    /// Mathematical Functions" (NBS AMS 55, 1964), Table 9.5, to 10
    /// decimals (the values here are quoted to the digits given there).
    const AS_TABLE_9_5: &[(u32, u32, f64)] = &[
        (0, 1, 2.404_825_557_7),
        (0, 2, 5.520_078_110_3),
        (0, 3, 8.653_727_912_9),
        (0, 4, 11.791_534_439_0),
        (1, 1, 3.831_705_970_2),
        (1, 2, 7.015_586_669_8),
        (1, 3, 10.173_468_135_1),
        (2, 1, 5.135_622_301_8),
        (2, 2, 8.417_244_140_4),
        (3, 1, 6.380_161_895_9),
        (3, 2, 9.761_023_129_8),
        (4, 1, 7.588_342_434_5),
        (5, 1, 8.771_483_815_9),
        (6, 1, 9.936_109_524_2),
        (7, 1, 11.086_370_019_2),
    ];

    #[test]
    fn zeros_match_abramowitz_stegun_table_9_5() {
        for &(m, n, z) in AS_TABLE_9_5 {
            let got = bessel_zero(m, n);
            // The table gives 10 decimals; 2e-10 is rounding of the last one.
            assert!((got - z).abs() < 2e-10, "j({m},{n}) = {got}, table {z}");
        }
    }

    #[test]
    fn values_match_known_points() {
        // J0(1) = 0.7651976866, J1(1) = 0.4400505857 (A&S Table 9.1).
        assert!((bessel_j(0, 1.0) - 0.765_197_686_6).abs() < 1e-10);
        assert!((bessel_j(1, 1.0) - 0.440_050_585_7).abs() < 1e-10);
        // J2(10) = 0.2546303137 (A&S Table 9.1 at x = 10).
        assert!((bessel_j(2, 10.0) - 0.254_630_313_7).abs() < 1e-10);
    }

    #[test]
    fn zeros_are_zeros_and_ordered_far_out() {
        for m in [0u32, 3, 12, 30] {
            let zs = zeros_below(m, 80.0, 1);
            assert!(zs.len() > 5);
            for w in zs.windows(2) {
                assert!(w[1] - w[0] > 2.9, "m={m} {w:?}");
            }
            for &z in &zs {
                // |J| near a zero is at most |J'|·|Δx|; 1e-12 absolute.
                assert!(bessel_j(m, z).abs() < 1e-12, "m={m} z={z}");
            }
        }
    }
}
