//! The band fit: variable-projection Levenberg–Marquardt on the free
//! poles, the all-parameter fallback, rejection of insignificant
//! components, and the covariance from the full Jacobian.

use std::f64::consts::PI;

use nalgebra::{DMatrix, DVector};

use super::config::*;

/// Fits the band from the given free poles, removing the least
/// significant component (amplitude below [`MIN_AMPLITUDE_Z`] standard
/// errors, or growing by more than that) and refitting until all pass.
/// Returns the last fit, the number removed and the iterations spent.
pub(super) fn fit_with_rejection(
    problem: &mut FitProblem,
    mut free: Vec<C64>,
    fixed: &[C64],
) -> (PoleFit, usize, usize) {
    let mut rejected = 0usize;
    let mut iterations = 0usize;
    loop {
        let result = problem.solve(&free, fixed);
        iterations += result.iterations;
        // A component broader than the window is background (which the
        // baseline models), not a partial: the broadest goes first.
        let broadest = result
            .free
            .iter()
            .enumerate()
            .filter(|(_, c)| -c.s.re > problem.broad_limit)
            .min_by(|a, b| a.1.s.re.total_cmp(&b.1.s.re))
            .map(|(i, _)| i);
        let worst = broadest.or_else(|| {
            result
                .free
                .iter()
                .enumerate()
                .filter(|(_, c)| c.amplitude_z < MIN_AMPLITUDE_Z || c.growth_z > MIN_AMPLITUDE_Z)
                .min_by(|a, b| a.1.amplitude_z.total_cmp(&b.1.amplitude_z))
                .map(|(i, _)| i)
        });
        let Some(i) = worst else {
            return (result, rejected, iterations);
        };
        // Restart from the fitted poles of the others.
        free = result
            .free
            .iter()
            .enumerate()
            .filter(|&(j, _)| j != i)
            .map(|(_, c)| c.s)
            .collect();
        rejected += 1;
    }
}

/// One fitted component with its significance.
#[derive(Debug, Clone, Copy)]
pub(super) struct FittedComponent {
    /// Pole per sample.
    pub(super) s: C64,
    /// Complex amplitude of b·z^n (the real partial is b·z^n + b̄·z̄^n).
    pub(super) b: C64,
    /// Variance of Re s (decay per sample), per sample².
    pub(super) var_sigma: f64,
    /// Variance of Im s (rad/sample)².
    pub(super) var_omega: f64,
    /// |b| over its standard error.
    pub(super) amplitude_z: f64,
    /// −Re s over its standard error when the component grows (else 0).
    pub(super) growth_z: f64,
}

pub(super) struct PoleFit {
    pub(super) free: Vec<FittedComponent>,
    pub(super) iterations: usize,
    pub(super) stop: StopReason,
    pub(super) reduced_chi2: f64,
    /// Wald statistic eᵀ·C_e⁻¹·e of the baseline coefficients (0 without).
    pub(super) baseline_wald: f64,
}

/// G(s) alone, as in [`geometric`].
pub(super) fn geometric_value(es: C64, zn: C64, w: C64, n: f64) -> C64 {
    let u = es * w;
    let d = u - 1.0;
    if d.norm_sqr() * n * n < 1e-6 {
        return C64::new(n, 0.0)
            + d * (n * (n - 1.0) / 2.0)
            + d * d * (n * (n - 1.0) * (n - 2.0) / 6.0);
    }
    (C64::new(1.0, 0.0) - zn) / (-d)
}

/// The bins of one fit window and the model of their spectrum
/// (module notes, step 4). Parameters, all real: (Re s, Im s) of each
/// free pole, then (Re b, Im b) of every component (free, then fixed),
/// then (Re e, Im e) of each baseline coefficient.
pub(super) struct FitProblem {
    pub(super) n: f64,
    /// e^(−2πik/N) per bin.
    pub(super) w: Vec<C64>,
    /// Baseline abscissa (k − kc)/half-width per bin.
    pub(super) t: Vec<f64>,
    pub(super) data: Vec<C64>,
    /// The data stacked (Re of every bin, then Im).
    pub(super) stacked: DVector<f64>,
    /// Noise variance of each of Re X_k and Im X_k: N·σ²/2.
    pub(super) bin_var: f64,
    /// Number of baseline coefficients (0: no baseline).
    pub(super) baseline_terms: usize,
    /// Decay per sample at which a line's half-power half-width α/2π
    /// reaches the fit window's half-width: a component this broad is
    /// background, not a partial ([`fit_with_rejection`]).
    pub(super) broad_limit: f64,
}

/// G(s) = Σ_{n<N} (e^s·w)^n = (1 − e^(Ns))/(1 − e^s·w) for w^N = 1, and
/// dG/ds = Σ n·(e^s·w)^n; near e^s·w = 1 the three-term series in
/// δ = e^s·w − 1 (error ~ (Nδ)³/24 relative, below 1e−10 where used).
pub(super) fn geometric(es: C64, zn: C64, w: C64, n: f64) -> (C64, C64) {
    let u = es * w;
    let d = u - 1.0;
    if d.norm_sqr() * n * n < 1e-6 {
        let g = C64::new(n, 0.0)
            + d * (n * (n - 1.0) / 2.0)
            + d * d * (n * (n - 1.0) * (n - 2.0) / 6.0);
        let dg = (C64::new(n * (n - 1.0) / 2.0, 0.0) + d * (n * (n - 1.0) * (n - 2.0) / 3.0)) * u;
        return (g, dg);
    }
    let om = -d; // 1 − u
    let g = (C64::new(1.0, 0.0) - zn) / om;
    let dg = (zn * om * (-n) + (C64::new(1.0, 0.0) - zn) * u) / (om * om);
    (g, dg)
}

impl FitProblem {
    /// The fit of bins `klo..=khi` of a span of `n` samples (`bin(k)` its
    /// transform), baseline centred on `kc` over `half` bins, noise `sigma2`.
    pub(super) fn new(
        n: usize,
        bin: impl Fn(i64) -> C64,
        klo: i64,
        khi: i64,
        kc: i64,
        half: f64,
        sigma2: f64,
    ) -> Self {
        let nf = n as f64;
        let mut w = Vec::new();
        let mut t = Vec::new();
        let mut data = Vec::new();
        let step = C64::from_polar(1.0, -2.0 * PI / nf);
        let mut wk = C64::from_polar(1.0, -2.0 * PI * klo as f64 / nf);
        for k in klo..=khi {
            w.push(wk);
            wk *= step;
            t.push((k - kc) as f64 / half.max(1.0));
            data.push(bin(k));
        }
        FitProblem {
            n: nf,
            w,
            t,
            stacked: stack(&data),
            data,
            bin_var: nf * sigma2 / 2.0,
            baseline_terms: BASELINE_DEGREE + 1,
            broad_limit: 2.0 * PI * half.max(1.0) / nf,
        }
    }

    /// Residuals d − model and, when asked, the real Jacobian of the
    /// model (rows: Re of every bin, then Im of every bin).
    pub(super) fn evaluate(
        &self,
        theta: &[f64],
        nfree: usize,
        fixed: &[C64],
        want_jacobian: bool,
    ) -> (Vec<C64>, Option<DMatrix<f64>>) {
        let nb = self.data.len();
        let ncomp = nfree + fixed.len();
        let np = theta.len();
        let mut model = vec![C64::new(0.0, 0.0); nb];
        let mut jac = if want_jacobian {
            Some(DMatrix::<f64>::zeros(2 * nb, np))
        } else {
            None
        };
        let i_unit = C64::new(0.0, 1.0);
        for c in 0..ncomp {
            let s = if c < nfree {
                C64::new(theta[2 * c], theta[2 * c + 1])
            } else {
                fixed[c - nfree]
            };
            let boff = 2 * nfree + 2 * c;
            let b = C64::new(theta[boff], theta[boff + 1]);
            let es = s.exp();
            let zn = (s * self.n).exp();
            let esc = es.conj();
            let znc = zn.conj();
            for k in 0..nb {
                let Some(j) = jac.as_mut() else {
                    let g = geometric_value(es, zn, self.w[k], self.n);
                    let gi = geometric_value(esc, znc, self.w[k], self.n);
                    model[k] += b * g + b.conj() * gi;
                    continue;
                };
                let (g, dg) = geometric(es, zn, self.w[k], self.n);
                let (gi, dgi) = geometric(esc, znc, self.w[k], self.n);
                model[k] += b * g + b.conj() * gi;
                {
                    let mut put = |col: usize, v: C64| {
                        j[(k, col)] = v.re;
                        j[(nb + k, col)] = v.im;
                    };
                    if c < nfree {
                        let d_sigma = b * dg + b.conj() * dgi;
                        let d_omega = i_unit * (b * dg - b.conj() * dgi);
                        put(2 * c, d_sigma);
                        put(2 * c + 1, d_omega);
                    }
                    put(boff, g + gi);
                    put(boff + 1, i_unit * (g - gi));
                }
            }
        }
        let eoff = 2 * nfree + 2 * ncomp;
        for p in 0..self.baseline_terms {
            let e = C64::new(theta[eoff + 2 * p], theta[eoff + 2 * p + 1]);
            for k in 0..nb {
                let tp = self.t[k].powi(p as i32);
                model[k] += e * tp;
                if let Some(j) = jac.as_mut() {
                    j[(k, eoff + 2 * p)] = tp;
                    j[(nb + k, eoff + 2 * p)] = 0.0;
                    j[(k, eoff + 2 * p + 1)] = 0.0;
                    j[(nb + k, eoff + 2 * p + 1)] = tp;
                }
            }
        }
        let r = self.data.iter().zip(&model).map(|(d, m)| d - m).collect();
        (r, jac)
    }

    /// eᵀ·C_e⁻¹·e for the baseline block e of θ, C_e = (N·σ²/2)·(JᵀJ)⁻¹_ee.
    pub(super) fn baseline_wald(&self, theta: &[f64], inv: &DMatrix<f64>) -> f64 {
        let m = 2 * self.baseline_terms;
        if m == 0 {
            return 0.0;
        }
        let off = theta.len() - m;
        let c = DMatrix::from_fn(m, m, |r, q| self.bin_var * inv[(off + r, off + q)]);
        let e = DVector::from_fn(m, |r, _| theta[off + r]);
        match c.cholesky() {
            Some(ch) => e.dot(&ch.solve(&e)),
            None => f64::INFINITY,
        }
    }

    pub(super) fn cost(r: &[C64]) -> f64 {
        r.iter().map(|v| v.norm_sqr()).sum()
    }

    /// The fit by variable projection (G. H. Golub and V. Pereyra, "The
    /// differentiation of pseudo-inverses and nonlinear least squares
    /// problems whose variables separate", SIAM J. Numer. Anal. 10(2),
    /// 1973): the model is linear in the amplitudes and the baseline, so
    /// for given poles these are solved exactly (least squares by QR) and
    /// Levenberg–Marquardt moves the free poles alone on the projected
    /// residual P⊥(s)·d, with the Jacobian −P⊥·(∂Φ/∂s)·a of L. Kaufman ("A
    /// variable projection method for solving separable nonlinear least
    /// squares problems", BIT 15, 1975). The minimum is that of the full
    /// problem; it is reached in a few iterations where moving poles and
    /// amplitudes together crawled along their correlation. The
    /// covariance then comes from the full Jacobian ([`FitProblem::finish`]).
    pub(super) fn solve(&mut self, free: &[C64], fixed: &[C64]) -> PoleFit {
        let nfree = free.len();
        let mut poles = free.to_vec();
        let Some(mut at) = self.project(&poles, fixed) else {
            return self.solve_full(free, fixed);
        };
        let nb = self.data.len();
        let np = 2 * nfree + at.lin.len();
        let dof = ((2 * nb) as f64 - np as f64).max(1.0);
        let mut mu = 1e-3;
        let mut iterations = 0;
        let mut stop = StopReason::Converged;
        while nfree > 0 && iterations < MAX_ITERATIONS {
            iterations += 1;
            let j = &at.jacobian;
            let a = j.transpose() * j;
            let g = j.transpose() * &at.resid;
            let mut accepted = None;
            while mu < 1e12 {
                if let Some(step) = solve_damped(&a, &g, mu) {
                    let trial: Vec<C64> = poles
                        .iter()
                        .enumerate()
                        .map(|(c, s)| s + C64::new(step[2 * c], step[2 * c + 1]))
                        .collect();
                    if trial.iter().all(|s| s.re.is_finite() && s.im.is_finite()) {
                        if let Some(next) = self.project(&trial, fixed) {
                            if next.cost <= at.cost {
                                accepted = Some((trial, next));
                                break;
                            }
                        }
                    }
                }
                mu *= 4.0;
            }
            let Some((trial, next)) = accepted else {
                stop = StopReason::NoProgress;
                break;
            };
            mu = (mu / 3.0).max(1e-12);
            let old = at.cost;
            poles = trial;
            at = next;
            // A component grown broader than the window will be removed
            // (fit_with_rejection): no use polishing the others first.
            if poles.iter().any(|s| -s.re > self.broad_limit) {
                stop = StopReason::NoProgress;
                break;
            }
            // As in the full fit: the drop in χ² bounds the step's length
            // in standard errors (of the poles, with the amplitudes at
            // their best values for every pole position).
            let misfit = (at.cost / self.bin_var / dof).max(1.0);
            if (old - at.cost) / self.bin_var <= STEP_TOLERANCE_SE * STEP_TOLERANCE_SE * misfit {
                stop = StopReason::Converged;
                break;
            }
            if old - at.cost <= 1e-15 * old {
                stop = StopReason::NoProgress;
                break;
            }
            if iterations == MAX_ITERATIONS {
                stop = StopReason::MaxIterations;
            }
        }
        let mut theta = Vec::with_capacity(np);
        for s in &poles {
            theta.push(s.re);
            theta.push(s.im);
        }
        theta.extend(at.lin.iter());
        self.finish(&theta, nfree, fixed, iterations, stop)
    }

    /// The least-squares amplitudes and baseline for the given poles, the
    /// residual they leave and its Kaufman Jacobian in the free poles
    /// ([`FitProblem::solve`]). None when the linear columns are
    /// numerically dependent (two poles on top of each other).
    pub(super) fn project(&self, free: &[C64], fixed: &[C64]) -> Option<Projection> {
        let nb = self.data.len();
        let nfree = free.len();
        let ncomp = nfree + fixed.len();
        let nlin = 2 * ncomp + 2 * self.baseline_terms;
        let rows = 2 * nb;
        if nlin > rows {
            return None;
        }
        let i_unit = C64::new(0.0, 1.0);
        let mut phi = DMatrix::<f64>::zeros(rows, nlin);
        // dG/ds of each free pole and of its image, per bin.
        let mut dgs: Vec<(Vec<C64>, Vec<C64>)> = Vec::with_capacity(nfree);
        for c in 0..ncomp {
            let s = if c < nfree { free[c] } else { fixed[c - nfree] };
            let es = s.exp();
            let zn = (s * self.n).exp();
            let (esc, znc) = (es.conj(), zn.conj());
            let mut dg = Vec::new();
            let mut dgi = Vec::new();
            if c < nfree {
                dg.reserve(nb);
                dgi.reserve(nb);
            }
            for k in 0..nb {
                let (g, gi) = if c < nfree {
                    let (g, d) = geometric(es, zn, self.w[k], self.n);
                    let (gi, di) = geometric(esc, znc, self.w[k], self.n);
                    dg.push(d);
                    dgi.push(di);
                    (g, gi)
                } else {
                    (
                        geometric_value(es, zn, self.w[k], self.n),
                        geometric_value(esc, znc, self.w[k], self.n),
                    )
                };
                let u = g + gi;
                let v = i_unit * (g - gi);
                phi[(k, 2 * c)] = u.re;
                phi[(nb + k, 2 * c)] = u.im;
                phi[(k, 2 * c + 1)] = v.re;
                phi[(nb + k, 2 * c + 1)] = v.im;
            }
            if c < nfree {
                dgs.push((dg, dgi));
            }
        }
        let eoff = 2 * ncomp;
        for p in 0..self.baseline_terms {
            for k in 0..nb {
                let tp = self.t[k].powi(p as i32);
                phi[(k, eoff + 2 * p)] = tp;
                phi[(nb + k, eoff + 2 * p + 1)] = tp;
            }
        }
        // Least squares by the normal equations with the columns scaled
        // to unit norm (Cholesky of the 2·comps + baseline Gram matrix;
        // a Householder QR of the tall Φ costs several times as much).
        let norms: Vec<f64> = phi.column_iter().map(|c| c.norm()).collect();
        if norms.iter().any(|&v| !(v > 0.0 && v.is_finite())) {
            return None;
        }
        for (j, &v) in norms.iter().enumerate() {
            phi.column_mut(j).unscale_mut(v);
        }
        let gram = phi.tr_mul(&phi);
        let chol = gram.cholesky()?;
        // Numerically dependent columns: the factor's smallest pivot.
        let l = chol.l_dirty();
        if (0..nlin).any(|i| l[(i, i)] <= 1e-6) {
            return None;
        }
        let d = &self.stacked;
        let lin_scaled = chol.solve(&phi.tr_mul(d));
        let resid = d - &phi * &lin_scaled;
        let cost = resid.norm_squared();
        let lin = DVector::from_fn(nlin, |j, _| lin_scaled[j] / norms[j]);
        // Kaufman's Jacobian of the model, P⊥·(∂Φ/∂s)·a, in the sign
        // convention of the full fit (residual = data − model).
        let mut jacobian = DMatrix::<f64>::zeros(rows, 2 * nfree);
        for (c, (dg, dgi)) in dgs.iter().enumerate() {
            let b = C64::new(lin[2 * c], lin[2 * c + 1]);
            for k in 0..nb {
                let d_sigma = b * dg[k] + b.conj() * dgi[k];
                let d_omega = i_unit * (b * dg[k] - b.conj() * dgi[k]);
                jacobian[(k, 2 * c)] = d_sigma.re;
                jacobian[(nb + k, 2 * c)] = d_sigma.im;
                jacobian[(k, 2 * c + 1)] = d_omega.re;
                jacobian[(nb + k, 2 * c + 1)] = d_omega.im;
            }
        }
        if nfree > 0 {
            let coef = chol.solve(&phi.tr_mul(&jacobian));
            jacobian -= &phi * coef;
        }
        Some(Projection {
            cost,
            lin,
            resid,
            jacobian,
        })
    }

    /// Levenberg–Marquardt on all parameters from the given poles, the
    /// linear ones starting at their least-squares values for those poles:
    /// the fallback of [`FitProblem::solve`] where the linear columns are
    /// degenerate at the start.
    pub(super) fn solve_full(&mut self, free: &[C64], fixed: &[C64]) -> PoleFit {
        let nfree = free.len();
        let ncomp = nfree + fixed.len();
        let np = 2 * nfree + 2 * ncomp + 2 * self.baseline_terms;
        let nb = self.data.len();
        let mut theta = vec![0.0; np];
        for (c, s) in free.iter().enumerate() {
            theta[2 * c] = s.re;
            theta[2 * c + 1] = s.im;
        }
        // Linear parameters by least squares at the starting poles: the
        // model is linear in them, so one Gauss–Newton step restricted to
        // them from zero is exact.
        let lin0 = 2 * nfree;
        let (r, j) = self.evaluate(&theta, nfree, fixed, true);
        let j = j.expect("asked for");
        let rv = stack(&r);
        let jl = j.columns(lin0, np - lin0).into_owned();
        if let Some(step) = solve_damped(&(jl.transpose() * &jl), &(jl.transpose() * &rv), 0.0) {
            for (i, v) in step.iter().enumerate() {
                theta[lin0 + i] += v;
            }
        }
        let mut mu = 1e-3;
        let mut iterations = 0;
        let mut stop = StopReason::MaxIterations;
        let (mut r, _) = self.evaluate(&theta, nfree, fixed, false);
        let mut cost = Self::cost(&r);
        let dof = ((2 * nb) as f64 - np as f64).max(1.0);
        while iterations < MAX_ITERATIONS {
            iterations += 1;
            let (_, j) = self.evaluate(&theta, nfree, fixed, true);
            let j = j.expect("asked for");
            let a = j.transpose() * &j;
            let g = j.transpose() * stack(&r);
            let mut accepted = None;
            while mu < 1e12 {
                if let Some(step) = solve_damped(&a, &g, mu) {
                    let trial: Vec<f64> =
                        theta.iter().zip(step.iter()).map(|(t, d)| t + d).collect();
                    if trial.iter().all(|v| v.is_finite()) {
                        let (rt, _) = self.evaluate(&trial, nfree, fixed, false);
                        let ct = Self::cost(&rt);
                        if ct <= cost {
                            accepted = Some((trial, rt, ct));
                            break;
                        }
                    }
                }
                mu *= 4.0;
            }
            let Some((trial, rt, ct)) = accepted else {
                stop = StopReason::NoProgress;
                break;
            };
            mu = (mu / 3.0).max(1e-12);
            theta = trial;
            r = rt;
            let old = cost;
            cost = ct;
            // The step's length in standard errors: the drop in χ² it
            // bought, (old − cost)/σ_bin², is its squared Mahalanobis
            // length δᵀ(JᵀJ/σ_bin²)δ for a Gauss–Newton step, which bounds
            // every parameter's (δ_i/SE_i)² (Cauchy–Schwarz), so no
            // inverse is needed to test it.
            // Where the model misfits (reduced χ² above 1) the standard
            // errors scale with it, and so does the tolerance.
            let misfit = (cost / self.bin_var / dof).max(1.0);
            let small =
                (old - cost) / self.bin_var <= STEP_TOLERANCE_SE * STEP_TOLERANCE_SE * misfit;
            if small || nfree == 0 {
                stop = StopReason::Converged;
                break;
            }
            if old - cost <= 1e-15 * old {
                stop = StopReason::NoProgress;
                break;
            }
        }
        self.finish(&theta, nfree, fixed, iterations, stop)
    }

    /// The fit's result at the solution θ: the covariance from the full
    /// Jacobian (poles, amplitudes and baseline together), each free
    /// component's significance and the baseline's Wald statistic.
    pub(super) fn finish(
        &self,
        theta: &[f64],
        nfree: usize,
        fixed: &[C64],
        iterations: usize,
        stop: StopReason,
    ) -> PoleFit {
        let np = theta.len();
        let nb = self.data.len();
        // Covariance at the solution.
        let (r, j) = self.evaluate(theta, nfree, fixed, true);
        let j = j.expect("asked for");
        let a = j.transpose() * &j;
        let inv = scaled_inverse(&a);
        let dof = (2 * nb) as f64 - np as f64;
        let reduced_chi2 = Self::cost(&r) / (2.0 * self.bin_var) / (dof / 2.0).max(1.0);
        let mut out = Vec::with_capacity(nfree);
        for c in 0..nfree {
            let s = C64::new(theta[2 * c], theta[2 * c + 1]);
            let boff = 2 * nfree + 2 * c;
            let b = C64::new(theta[boff], theta[boff + 1]);
            let (var_sigma, var_omega, amplitude_z) = match &inv {
                Some(inv) => {
                    let vs = self.bin_var * inv[(2 * c, 2 * c)];
                    let vo = self.bin_var * inv[(2 * c + 1, 2 * c + 1)];
                    // Variance of |b| by the delta method.
                    let (br, bi) = (b.re, b.im);
                    let m2 = b.norm_sqr().max(1e-300);
                    let v = self.bin_var
                        * (br * br * inv[(boff, boff)]
                            + bi * bi * inv[(boff + 1, boff + 1)]
                            + 2.0 * br * bi * inv[(boff, boff + 1)])
                        / m2;
                    (vs, vo, b.norm() / v.max(1e-300).sqrt())
                }
                None => (f64::INFINITY, f64::INFINITY, 0.0),
            };
            let growth_z = if s.re > 0.0 {
                s.re / var_sigma.sqrt()
            } else {
                0.0
            };
            out.push(FittedComponent {
                s,
                b,
                var_sigma,
                var_omega,
                amplitude_z,
                growth_z,
            });
        }
        PoleFit {
            free: out,
            iterations,
            stop,
            reduced_chi2,
            baseline_wald: inv
                .as_ref()
                .map(|inv| self.baseline_wald(theta, inv))
                .unwrap_or(f64::INFINITY),
        }
    }
}

/// One variable-projection evaluation ([`FitProblem::project`]).
pub(super) struct Projection {
    /// Σ residual², the cost of the full fit at these poles.
    pub(super) cost: f64,
    /// Least-squares amplitudes and baseline, in θ's order.
    pub(super) lin: DVector<f64>,
    /// Residual d − Φ·a, stacked (Re, then Im).
    pub(super) resid: DVector<f64>,
    /// Projected Jacobian in the free poles (2·bins × 2·free).
    pub(super) jacobian: DMatrix<f64>,
}

/// Real and imaginary parts stacked, matching the Jacobian's rows.
pub(super) fn stack(r: &[C64]) -> DVector<f64> {
    let nb = r.len();
    DVector::from_fn(2 * nb, |i, _| if i < nb { r[i].re } else { r[i - nb].im })
}

/// The scaling 1/√A_ii that brings A to unit diagonal; None when a
/// diagonal element is not positive.
fn unit_diagonal_scale(a: &DMatrix<f64>) -> Option<Vec<f64>> {
    let d: Vec<f64> = (0..a.nrows())
        .map(|i| {
            if a[(i, i)] > 0.0 {
                1.0 / a[(i, i)].sqrt()
            } else {
                0.0
            }
        })
        .collect();
    (!d.contains(&0.0)).then_some(d)
}

/// Solves (A + μ·diag A)·x = g with A scaled to unit diagonal first
/// (Marquardt's scaling), by Cholesky; None when singular.
pub(super) fn solve_damped(a: &DMatrix<f64>, g: &DVector<f64>, mu: f64) -> Option<DVector<f64>> {
    let np = a.nrows();
    let d = unit_diagonal_scale(a)?;
    let mut s = DMatrix::from_fn(np, np, |r, c| a[(r, c)] * d[r] * d[c]);
    for i in 0..np {
        s[(i, i)] += mu;
    }
    let gs = DVector::from_fn(np, |i, _| g[i] * d[i]);
    let x = s.cholesky()?.solve(&gs);
    Some(DVector::from_fn(np, |i, _| x[i] * d[i]))
}

/// (A)⁻¹ through the same unit-diagonal scaling; None when singular.
pub(super) fn scaled_inverse(a: &DMatrix<f64>) -> Option<DMatrix<f64>> {
    let np = a.nrows();
    let d = unit_diagonal_scale(a)?;
    let s = DMatrix::from_fn(np, np, |r, c| a[(r, c)] * d[r] * d[c]);
    let inv = s.cholesky()?.inverse();
    Some(DMatrix::from_fn(np, np, |r, c| inv[(r, c)] * d[r] * d[c]))
}
