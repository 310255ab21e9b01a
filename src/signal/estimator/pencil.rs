//! The matrix pencil: starting poles and the model order (MDL) from a
//! band's samples.

use nalgebra::{DMatrix, DVector};

use super::config::*;

/// Poles of a band's pencil in full-rate units.
pub(super) struct PencilPoles {
    pub(super) poles: Vec<C64>,
    pub(super) mdl_order: usize,
    pub(super) edge_order: usize,
    pub(super) samples: usize,
}

/// Result of [`matrix_pencil`].
#[derive(Debug, Clone)]
pub struct PencilResult {
    /// Poles z_i (per sample of the input).
    pub poles: Vec<C64>,
    /// Complex amplitudes h_i of y\[m\] ≈ Σ h_i·z_i^m.
    pub amplitudes: Vec<C64>,
    /// Singular values of the data matrix, descending.
    pub singular_values: Vec<f64>,
    /// MDL order.
    pub mdl_order: usize,
    /// Singular values above the noise edge (all, when `noise_sd` = 0).
    pub edge_order: usize,
}

/// The matrix pencil method (Hua and Sarkar 1990, SVD form): the Hankel
/// matrix Y (M−L)×(L+1) of y, Y = UΣVᴴ; with the K principal right
/// singular vectors, A₁ = Vᴴ_K without its last column and A₂ without its
/// first, the poles are the eigenvalues of A₂·A₁ᴴ·(A₁A₁ᴴ)⁻¹ (K×K), since
/// A₂ = TΛT⁻¹A₁ for the pole matrix Λ. K is the MDL order capped by
/// `max_order` and, when `noise_sd` (the standard deviation of a sample of
/// the complex noise) is positive, by the count of singular values above
/// [`NOISE_EDGE_FACTOR`]·noise_sd·(√(M−L) + √(L+1)). Amplitudes by least
/// squares on the Vandermonde matrix. Returns None when y is too short
/// (M < 6) or a decomposition fails.
pub fn matrix_pencil(y: &[C64], max_order: usize, noise_sd: f64) -> Option<PencilResult> {
    let m = y.len();
    if m < 6 {
        return None;
    }
    let l = (m / 3).max(2);
    let rows = m - l;
    let cols = l + 1;
    let hankel = DMatrix::from_fn(rows, cols, |i, j| y[i + j]);
    let svd = hankel.svd(false, true);
    let sv: Vec<f64> = svd.singular_values.iter().copied().collect();
    let v_t = svd.v_t?;
    let mdl = mdl_order(&sv, rows, max_order.min(l - 1));
    let edge_order = if noise_sd > 0.0 {
        let edge = NOISE_EDGE_FACTOR * noise_sd * ((rows as f64).sqrt() + (cols as f64).sqrt());
        sv.iter().filter(|&&s| s > edge).count()
    } else {
        sv.len()
    };
    let k = mdl.min(edge_order).min(max_order).min(l - 1);
    let mut result = PencilResult {
        poles: Vec::new(),
        amplitudes: Vec::new(),
        singular_values: sv,
        mdl_order: mdl,
        edge_order,
    };
    if k == 0 {
        return Some(result);
    }
    let a1 = v_t.view((0, 0), (k, l)).into_owned();
    let a2 = v_t.view((0, 1), (k, l)).into_owned();
    let a1h = a1.adjoint();
    let gram = &a1 * &a1h;
    let gram_inv = gram.try_inverse()?;
    let f = &a2 * &a1h * gram_inv;
    let poles = eigenvalues_complex(f)?;
    // Amplitudes: least squares on the Vandermonde matrix V_mi = z_i^m.
    let van = DMatrix::from_fn(m, k, |r, c| poles[c].powu(r as u32));
    let rhs = DVector::from_column_slice(y);
    // Normal equations (k×k) where they are well posed; the SVD for
    // nearly coincident poles.
    let h = match van.ad_mul(&van).cholesky() {
        Some(ch) if (0..k).all(|i| ch.l_dirty()[(i, i)].re > 1e-6 * (m as f64).sqrt()) => {
            ch.solve(&van.ad_mul(&rhs))
        }
        _ => van.svd(true, true).solve(&rhs, 1e-12).ok()?,
    };
    result.amplitudes = h.iter().copied().collect();
    result.poles = poles;
    Some(result)
}

/// Eigenvalues of a small complex matrix from its Schur form, reading
/// any 2×2 block left on the diagonal by the quadratic formula.
pub(super) fn eigenvalues_complex(f: DMatrix<C64>) -> Option<Vec<C64>> {
    let k = f.nrows();
    if k == 1 {
        return Some(vec![f[(0, 0)]]);
    }
    let scale = f.iter().map(|v| v.norm()).fold(0.0, f64::max).max(1e-300);
    let schur = nalgebra::linalg::Schur::try_new(f, 1e-14, 10_000)?;
    let (_, t) = schur.unpack();
    let mut ev = Vec::with_capacity(k);
    let mut i = 0;
    while i < k {
        if i + 1 < k && t[(i + 1, i)].norm() > 1e-12 * scale {
            let (a, b, c, d) = (t[(i, i)], t[(i, i + 1)], t[(i + 1, i)], t[(i + 1, i + 1)]);
            let tr = a + d;
            let det = a * d - b * c;
            let disc = (tr * tr - det * 4.0).sqrt();
            ev.push((tr + disc) * 0.5);
            ev.push((tr - disc) * 0.5);
            i += 2;
        } else {
            ev.push(t[(i, i)]);
            i += 1;
        }
    }
    Some(ev)
}

/// Model order by minimum description length (Wax and Kailath 1985,
/// eq. (16)): with the p eigenvalues λ of the sample covariance (the
/// squared singular values, descending) and `snapshots` rows,
/// MDL(k) = −(p−k)·snapshots·ln(g_k/a_k) + ½·k·(2p−k)·ln(snapshots),
/// g_k and a_k the geometric and arithmetic means of λ_(k+1..p). Returns
/// the k in 0..=`max_order` (and below p) that minimises it.
pub fn mdl_order(singular_values: &[f64], snapshots: usize, max_order: usize) -> usize {
    let p = singular_values.len();
    if p < 2 {
        return 0;
    }
    let lam: Vec<f64> = singular_values
        .iter()
        .map(|s| (s * s).max(1e-300))
        .collect();
    let ns = snapshots.max(1) as f64;
    let mut best = (0usize, f64::INFINITY);
    for k in 0..=max_order.min(p - 1) {
        let tail = &lam[k..];
        let cnt = tail.len() as f64;
        let log_g = tail.iter().map(|v| v.ln()).sum::<f64>() / cnt;
        let a = tail.iter().sum::<f64>() / cnt;
        let mdl = -(cnt * ns) * (log_g - a.ln())
            + 0.5 * (k as f64) * (2.0 * p as f64 - k as f64) * ns.ln();
        if mdl < best.1 {
            best = (k, mdl);
        }
    }
    best.0
}
