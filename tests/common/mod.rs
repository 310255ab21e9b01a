//! Code shared by the integration tests.

/// Banded symmetric positive definite matrices, for the finite-difference
/// eigen-solves of the disk (`disk_evenness`, `round_disk`): rows hold the
/// diagonal and the `bw` entries left of it.
pub mod banded {
    /// In-place banded Cholesky A = L·Lᵀ (band[k][d] = L[k][k−d]).
    pub fn cholesky(band: &mut [Vec<f64>], bw: usize) {
        let n = band.len();
        for k in 0..n {
            for d in (1..=bw.min(k)).rev() {
                let l = k - d;
                // L[k][l] = (A[k][l] − Σ_{p<l} L[k][p]L[l][p]) / L[l][l]
                let mut s = band[k][d];
                let lo = k.saturating_sub(bw);
                for p in lo..l {
                    if l - p <= bw {
                        s -= band[k][k - p] * band[l][l - p];
                    }
                }
                band[k][d] = s / band[l][0];
            }
            let s = band[k][0] - band[k][1..=bw.min(k)].iter().map(|v| v * v).sum::<f64>();
            assert!(s > 0.0, "matrix not positive definite");
            band[k][0] = s.sqrt();
        }
    }

    pub fn solve(band: &[Vec<f64>], bw: usize, b: &mut [f64]) {
        let n = band.len();
        for k in 0..n {
            let mut s = b[k];
            for d in 1..=bw.min(k) {
                s -= band[k][d] * b[k - d];
            }
            b[k] = s / band[k][0];
        }
        for k in (0..n).rev() {
            let mut s = b[k];
            for d in 1..=bw.min(n - 1 - k) {
                s -= band[k + d][d] * b[k + d];
            }
            b[k] = s / band[k][0];
        }
    }
}
