//! The direction of one order of a round's tension pattern from the
//! members' amplitudes: ψ = atan(A_lo/A_up) at each tap against
//! atan(g·|tan m(φ − α)|) (the derivation is in [`crate::fitting::round`]),
//! fitted by least squares (a grid over α, then Gauss–Newton), the
//! uncertainty from the residual scatter.
//!
//! Conventions: angles in degrees; ψ in degrees from 0 (the upper member
//! alone) to 90 (the lower alone); points are (pair index, tap angle φ,
//! ψ).

/// Two values of mφ closer than this (degrees, mod 180°) count as one
/// tap direction when counting how many distinct directions a pair was
/// heard from.
pub const SAME_DIRECTION_DEG: f64 = 1.0;

/// Why an orientation could not be fitted.
pub type Refusal = String;

/// How many distinct tap directions mφ (mod 180°, closer than
/// [`SAME_DIRECTION_DEG`] counting as one) the points hold.
fn distinct_directions(m: u32, points: &[(usize, f64, f64)]) -> usize {
    let mm = m as f64;
    let mut dirs: Vec<f64> = points
        .iter()
        .map(|p| (mm * p.1).rem_euclid(180.0))
        .collect();
    dirs.sort_by(f64::total_cmp);
    let mut distinct = 0;
    let mut last = f64::NEG_INFINITY;
    for &d in &dirs {
        if d - last > SAME_DIRECTION_DEG {
            distinct += 1;
            last = d;
        }
    }
    if distinct >= 2 && dirs[0] + 180.0 - dirs[dirs.len() - 1] <= SAME_DIRECTION_DEG {
        distinct -= 1;
    }
    distinct
}

/// The best α on a 0.5° grid, each pair's ln g on its own grid (the
/// pairs share only α): the start of the Gauss–Newton refinement.
fn grid_start(m: u32, n_pairs: usize, points: &[(usize, f64, f64)]) -> (f64, Vec<f64>) {
    let period = 180.0 / m as f64;
    // Grid: for each α, each pair's ln g on its own grid (the pairs
    // share only α).
    let mut best = (f64::INFINITY, 0.0, vec![0.0; n_pairs]);
    let steps = (period / 0.5).round() as usize;
    for i in 0..steps {
        let alpha = i as f64 * period / steps as f64;
        let mut lg = vec![0.0; n_pairs];
        let mut total = 0.0;
        for (k, lgk) in lg.iter_mut().enumerate() {
            let mut bk = (f64::INFINITY, 0.0);
            for j in -60..=60 {
                let l = j as f64 * 0.05;
                let s: f64 = points
                    .iter()
                    .filter(|p| p.0 == k)
                    .map(|&(_, phi, psi)| (psi - psi_model_deg(m, phi, alpha, l.exp())).powi(2))
                    .sum();
                if s < bk.0 {
                    bk = (s, l);
                }
            }
            *lgk = bk.1;
            total += bk.0;
        }
        if total < best.0 {
            best = (total, alpha, lg);
        }
    }
    (best.1, best.2)
}

/// ψ model: atan2(g·|sin m(φ − α)|, |cos m(φ − α)|), degrees.
pub fn psi_model_deg(m: u32, phi_deg: f64, alpha_deg: f64, g: f64) -> f64 {
    let x = (m as f64 * (phi_deg - alpha_deg)).to_radians();
    (g * x.sin().abs()).atan2(x.cos().abs()).to_degrees()
}

/// Fits α (and one pickup ratio per pair) of order m to the points
/// (pair index, tap angle φ in degrees, measured ψ in degrees); see the
/// module documentation. `n_pairs` is the number of pairs indexed.
///
/// # Errors
/// Fewer than three distinct tap directions mφ (mod 180°), or fewer
/// points than parameters plus two: the direction is not determined.
pub fn orientation(
    m: u32,
    n_pairs: usize,
    points: &[(usize, f64, f64)],
) -> std::result::Result<(f64, f64, Vec<f64>, f64), Refusal> {
    let mm = m as f64;
    let period = 180.0 / mm;
    let distinct = distinct_directions(m, points);
    let n_par = 1 + n_pairs;
    if distinct < 3 {
        return Err(format!(
            "the ({m},n) pairs were heard split from {distinct} distinct tap direction(s) ({m}·angle mod 180°); at least 3 are needed"
        ));
    }
    if points.len() < n_par + 2 {
        return Err(format!(
            "{} tap(s) resolved the order-{m} pairs; at least {} are needed for the direction and its uncertainty",
            points.len(),
            n_par + 2
        ));
    }
    let ssr = |alpha: f64, lg: &[f64]| -> f64 {
        points
            .iter()
            .map(|&(k, phi, psi)| (psi - psi_model_deg(m, phi, alpha, lg[k].exp())).powi(2))
            .sum()
    };
    let best = grid_start(m, n_pairs, points);
    // Gauss–Newton with a numerical Jacobian (central differences) and
    // step halving.
    let mut par: Vec<f64> = std::iter::once(best.0).chain(best.1).collect();
    let resid = |par: &[f64]| -> Vec<f64> {
        points
            .iter()
            .map(|&(k, phi, psi)| psi - psi_model_deg(m, phi, par[0], par[1 + k].exp()))
            .collect()
    };
    let jac = |par: &[f64]| -> nalgebra::DMatrix<f64> {
        let mut j = nalgebra::DMatrix::zeros(points.len(), n_par);
        for c in 0..n_par {
            let h = if c == 0 { 1e-4 } else { 1e-6 };
            let mut a = par.to_vec();
            let mut b = par.to_vec();
            a[c] += h;
            b[c] -= h;
            let (ra, rb) = (resid(&a), resid(&b));
            for r in 0..points.len() {
                j[(r, c)] = (ra[r] - rb[r]) / (2.0 * h);
            }
        }
        j
    };
    let mut cost = ssr(par[0], &par[1..]);
    for _ in 0..30 {
        let j = jac(&par);
        let r = nalgebra::DVector::from_vec(resid(&par));
        let jtj = j.transpose() * &j;
        let Some(chol) = jtj.clone().cholesky() else {
            break;
        };
        let step = chol.solve(&(j.transpose() * r));
        let mut lambda = 1.0;
        let mut moved = false;
        for _ in 0..12 {
            // Gauss–Newton: minimise |r + J·δ|², δ = −(JᵀJ)⁻¹Jᵀr.
            let trial: Vec<f64> = par
                .iter()
                .zip(step.iter())
                .map(|(p, s)| p - lambda * s)
                .collect();
            let c = ssr(trial[0], &trial[1..]);
            if c < cost {
                par = trial;
                cost = c;
                moved = true;
                break;
            }
            lambda *= 0.5;
        }
        if !moved || step.norm() * lambda < 1e-9 {
            break;
        }
    }
    let j = jac(&par);
    let dof = (points.len() - n_par) as f64;
    let s2 = cost / dof;
    let cov = (j.transpose() * &j).try_inverse().ok_or_else(|| {
        format!("the order-{m} direction is not determined by these taps (singular fit)")
    })?;
    let u = (s2 * cov[(0, 0)]).max(0.0).sqrt();
    let alpha = par[0].rem_euclid(period);
    let g: Vec<f64> = par[1..].iter().map(|l| l.exp()).collect();
    Ok((alpha, u, g, (cost / points.len() as f64).sqrt()))
}
