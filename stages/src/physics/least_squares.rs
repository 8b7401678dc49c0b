//! Nonlinear least squares by the Levenberg–Marquardt method, with parameter covariance
//! from the curvature at the minimum. Used by peak fits and model fits.
//!
//! Method: each step solves the damped linear problem
//!     min_h ‖J h + r‖² + μ ‖D h‖²
//! with Marquardt's diagonal scaling D (the running maximum of the Jacobian's column norms,
//! J. J. Moré, "The Levenberg-Marquardt algorithm: implementation and theory", in Numerical
//! Analysis (Dundee 1977), Springer LNM 630 (1978) 105), solved by Householder QR of the stacked matrix
//! [J D⁻¹; √μ I] so that JᵀJ is never formed. The damping μ follows the gain ratio
//! ρ = (actual reduction)/(predicted reduction): μ ← μ·max(1/3, 1 − (2ρ − 1)³) after a
//! good step, μ ← μ·ν, ν ← 2ν after a bad one (K. Madsen, H. B. Nielsen, O. Tingleff,
//! "Methods for non-linear least squares problems", 2nd ed., IMM DTU 2004, Algorithm 3.16).
//! Termination tests as in MINPACK (relative reduction, relative step, gradient cosine).

/// Why the minimiser stopped.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Termination {
    /// Actual and predicted relative reduction of the sum of squares below `ftol`.
    SmallReduction,
    /// Relative step below `xtol`.
    SmallStep,
    /// Every Jacobian column orthogonal to the residuals within `gtol`.
    SmallGradient,
    /// The residuals vanished.
    ZeroResiduals,
    /// The iteration limit was reached before any test passed: not converged.
    IterationLimit,
    /// The model could not be evaluated at the start.
    ModelFailed,
    /// A linear problem solved directly (no iterations needed).
    Linear,
}

impl Termination {
    /// Whether the minimiser converged (any test other than the limits and failures).
    pub fn converged(self) -> bool {
        !matches!(self, Termination::IterationLimit | Termination::ModelFailed)
    }
}

/// Settings of [`levenberg_marquardt`].
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LmOptions {
    /// Iteration limit (Jacobian evaluations).
    pub max_iterations: usize,
    /// Relative reduction of the sum of squares that counts as converged; 0 turns the
    /// test off (the default: it stops at a precision of only √ftol in the parameters).
    pub ftol: f64,
    /// Relative step (‖D h‖/‖D p‖) that counts as converged.
    pub xtol: f64,
    /// Largest |cosine| between a Jacobian column and the residuals at convergence.
    pub gtol: f64,
    /// First bound on the scaled step ‖D h‖, as a multiple of ‖D p₀‖ (of 1 when p₀ = 0);
    /// the bound then grows after good steps and shrinks after bad ones (Moré 1978, the
    /// trust region). `None`: no bound, the damping alone controls the step. A small bound
    /// keeps a far start from jumping onto a plateau of the model; see [`minimise`].
    pub initial_step_bound: Option<f64>,
}

impl Default for LmOptions {
    /// Tight tolerances: the minimiser runs until rounding stops progress.
    fn default() -> Self {
        LmOptions { max_iterations: 10_000, ftol: 0.0, xtol: 1e-15, gtol: 1e-15, initial_step_bound: None }
    }
}

/// The outcome of a minimisation.
#[derive(Debug, Clone, PartialEq)]
pub struct LmResult {
    /// Parameters at the end.
    pub params: Vec<f64>,
    /// Sum of squared residuals at the end.
    pub ssr: f64,
    /// Accepted and rejected steps taken.
    pub iterations: usize,
    /// Model evaluations.
    pub evaluations: usize,
    /// Why it stopped.
    pub termination: Termination,
    /// Jacobian at the end, row-major m × n.
    pub jacobian: Vec<f64>,
}

/// A model for least squares: fills the m residuals and the m × n Jacobian (row-major,
/// ∂r_i/∂p_j) at parameters p; returns false where the model cannot be evaluated (the step
/// is then rejected).
pub trait Residuals {
    /// Number of residuals m.
    fn len(&self) -> usize;
    /// Whether there are no residuals.
    fn is_empty(&self) -> bool {
        self.len() == 0
    }
    /// Residuals and Jacobian at `p`.
    fn eval(&self, p: &[f64], r: &mut [f64], jac: &mut [f64]) -> bool;
    /// Residuals alone at `p` (a trial step); by default through [`Residuals::eval`].
    fn residuals(&self, p: &[f64], r: &mut [f64]) -> bool {
        let mut jac = vec![0.0; r.len() * p.len()];
        self.eval(p, r, &mut jac)
    }
    /// Jacobian at `p` where the residuals `r` are already known (an accepted step); by
    /// default through [`Residuals::eval`]. Models with finite-difference Jacobians override
    /// it so that rejected trial steps cost one evaluation, not n + 1.
    fn jacobian(&self, p: &[f64], r: &[f64], jac: &mut [f64]) -> bool {
        let mut scratch = r.to_vec();
        self.eval(p, &mut scratch, jac)
    }
}

fn norm(v: &[f64]) -> f64 {
    // Scaled to avoid overflow and underflow.
    let scale = v.iter().fold(0.0f64, |s, x| s.max(x.abs()));
    if scale == 0.0 || !scale.is_finite() {
        return scale;
    }
    scale * v.iter().map(|x| (x / scale).powi(2)).sum::<f64>().sqrt()
}

/// Solve min ‖A x − b‖ by Householder QR; A is rows × n row-major (rows ≥ n) and is
/// overwritten, as is b. Returns `None` if R has a zero on its diagonal (rank deficient).
/// Source: G. H. Golub, C. F. Van Loan, Matrix Computations (4th ed., 2013), Alg. 5.3.2
/// and section 5.3.3.
pub fn qr_solve(a: &mut [f64], rows: usize, n: usize, b: &mut [f64]) -> Option<Vec<f64>> {
    let r_diag = householder(a, rows, n, Some(b))?;
    let mut x = vec![0.0; n];
    for k in (0..n).rev() {
        let s: f64 = (k + 1..n).map(|j| a[k * n + j] * x[j]).sum();
        x[k] = (b[k] - s) / r_diag[k];
    }
    Some(x)
}

/// Householder triangularisation in place; returns the diagonal of R (the strict upper part
/// stays in `a`), applying the same reflections to `b` when given.
fn householder(a: &mut [f64], rows: usize, n: usize, mut b: Option<&mut [f64]>) -> Option<Vec<f64>> {
    let mut r_diag = vec![0.0; n];
    let mut v = vec![0.0; rows];
    for k in 0..n {
        let col: Vec<f64> = (k..rows).map(|i| a[i * n + k]).collect();
        let alpha = norm(&col);
        if alpha == 0.0 || !alpha.is_finite() {
            return None;
        }
        let alpha = if col[0] > 0.0 { -alpha } else { alpha };
        for (i, c) in col.iter().enumerate() {
            v[k + i] = *c;
        }
        v[k] -= alpha;
        let vnorm2: f64 = (k..rows).map(|i| v[i] * v[i]).sum();
        if vnorm2 > 0.0 {
            for j in k..n {
                let dot: f64 = (k..rows).map(|i| v[i] * a[i * n + j]).sum();
                let f = 2.0 * dot / vnorm2;
                for i in k..rows {
                    a[i * n + j] -= f * v[i];
                }
            }
            if let Some(b) = b.as_deref_mut() {
                let dot: f64 = (k..rows).map(|i| v[i] * b[i]).sum();
                let f = 2.0 * dot / vnorm2;
                for i in k..rows {
                    b[i] -= f * v[i];
                }
            }
        }
        r_diag[k] = alpha;
    }
    Some(r_diag)
}

/// Minimise ‖r(p)‖² from `p0`.
pub fn levenberg_marquardt<M: Residuals>(model: &M, p0: &[f64], opts: &LmOptions) -> LmResult {
    let (m, n) = (model.len(), p0.len());
    let mut p = p0.to_vec();
    let mut r = vec![0.0; m];
    let mut jac = vec![0.0; m * n];
    let mut evaluations = 1;
    let finish = |p: Vec<f64>, r: &[f64], jac: Vec<f64>, iterations, evaluations, termination| LmResult {
        ssr: r.iter().map(|x| x * x).sum(),
        params: p,
        iterations,
        evaluations,
        termination,
        jacobian: jac,
    };
    if !model.eval(&p, &mut r, &mut jac) || r.iter().chain(&jac).any(|x| !x.is_finite()) {
        return finish(p, &r, jac, 0, evaluations, Termination::ModelFailed);
    }
    let column_norms =
        |jac: &[f64]| (0..n).map(|j| norm(&(0..m).map(|i| jac[i * n + j]).collect::<Vec<_>>())).collect::<Vec<f64>>();
    let mut d: Vec<f64> = column_norms(&jac).iter().map(|c| if *c > 0.0 { *c } else { 1.0 }).collect();
    let mut mu: f64 = 1e-3;
    let mut nu = 2.0;
    let scaled_norm = |p: &[f64], d: &[f64]| norm(&p.iter().zip(d).map(|(p, d)| p * d).collect::<Vec<_>>());
    let bounded = opts.initial_step_bound.is_some();
    let mut bound = opts.initial_step_bound.map_or(f64::INFINITY, |f| {
        let n0 = scaled_norm(&p, &d);
        f * if n0 > 0.0 { n0 } else { 1.0 }
    });
    let (mut r_new, mut jac_new) = (vec![0.0; m], vec![0.0; m * n]);
    for iteration in 1..=opts.max_iterations {
        let rnorm = norm(&r);
        if rnorm == 0.0 {
            return finish(p, &r, jac, iteration - 1, evaluations, Termination::ZeroResiduals);
        }
        // Gradient test: cosine between each column and the residual vector.
        let cols = column_norms(&jac);
        let gmax = (0..n)
            .filter(|&j| cols[j] > 0.0)
            .map(|j| ((0..m).map(|i| jac[i * n + j] * r[i]).sum::<f64>() / (cols[j] * rnorm)).abs())
            .fold(0.0, f64::max);
        if gmax <= opts.gtol {
            return finish(p, &r, jac, iteration - 1, evaluations, Termination::SmallGradient);
        }
        // Damped step from [J D⁻¹; √μ I] u = [−r; 0], h = D⁻¹ u, with μ raised until the
        // step is inside the trust region.
        let mut u = None;
        for _ in 0..64 {
            match damped_step(&jac, &r, &d, mu, m, n) {
                Some(step) if norm(&step) <= bound => {
                    u = Some(step);
                    break;
                }
                Some(_) | None => mu = (mu * 4.0).max(1e-12),
            }
        }
        let Some(u) = u else {
            return finish(p, &r, jac, iteration, evaluations, Termination::SmallStep);
        };
        let h: Vec<f64> = u.iter().zip(&d).map(|(u, d)| u / d).collect();
        let dp = norm(&u);
        let dx = scaled_norm(&p, &d);
        let trial: Vec<f64> = p.iter().zip(&h).map(|(p, h)| p + h).collect();
        // Predicted reduction ‖r‖² − ‖r + J h‖² = ‖J h‖² + 2μ‖D h‖², the second form free of
        // cancellation (it uses (JᵀJ + μ DᵀD) h = −Jᵀr; Moré 1978, section 4).
        let jh: Vec<f64> = (0..m).map(|i| (0..n).map(|j| jac[i * n + j] * h[j]).sum::<f64>()).collect();
        let ssr = rnorm * rnorm;
        let predicted = norm(&jh).powi(2) + 2.0 * mu * dp * dp;
        evaluations += 1;
        let ok = model.residuals(&trial, &mut r_new) && r_new.iter().all(|x| x.is_finite());
        let actual = if ok { ssr - norm(&r_new).powi(2) } else { f64::NEG_INFINITY };
        let rho = if predicted > 0.0 { actual / predicted } else { -1.0 };
        // Near the minimum both reductions fall below the rounding of ‖r‖²; the ratio is then
        // noise, and a step the linear model predicts to be that small is taken.
        let at_rounding = ok && predicted <= 16.0 * f64::EPSILON * ssr && actual >= -16.0 * f64::EPSILON * ssr;
        // The Jacobian is needed only where the step is taken; a model that cannot give it
        // there rejects the step.
        let take = (rho > 0.0 || at_rounding)
            && model.jacobian(&trial, &r_new, &mut jac_new)
            && jac_new.iter().all(|x| x.is_finite());
        if take {
            p = trial;
            std::mem::swap(&mut r, &mut r_new);
            std::mem::swap(&mut jac, &mut jac_new);
            for (dj, c) in d.iter_mut().zip(column_norms(&jac)) {
                *dj = dj.max(c);
            }
            mu *= if rho > 0.0 { (1.0 - (2.0 * rho - 1.0).powi(3)).max(1.0 / 3.0) } else { 1.0 / 3.0 };
            nu = 2.0;
            if bounded && (rho > 0.75 || at_rounding) {
                bound = bound.max(3.0 * dp);
            } else if bounded && rho < 0.25 {
                bound = 0.5 * bound.min(dp).max(f64::MIN_POSITIVE);
            }
            if opts.ftol > 0.0 && actual.abs() <= opts.ftol * ssr && predicted <= opts.ftol * ssr && rho <= 2.0 {
                return finish(p, &r, jac, iteration, evaluations, Termination::SmallReduction);
            }
        } else {
            mu *= nu;
            nu *= 2.0;
            if bounded {
                bound = 0.5 * dp;
            }
        }
        if dp <= opts.xtol * dx {
            return finish(p, &r, jac, iteration, evaluations, Termination::SmallStep);
        }
    }
    finish(p, &r, jac, opts.max_iterations, evaluations, Termination::IterationLimit)
}

/// Whether a result sits on a plateau of the model: some parameter no longer changes the
/// residuals (|∂r/∂ln p_j| below 1e-10 ‖r‖), so the stationary point says nothing about it.
pub fn is_degenerate(result: &LmResult, m: usize) -> bool {
    let n = result.params.len();
    let rnorm = result.ssr.sqrt();
    (0..n).any(|j| {
        let col = norm(&(0..m).map(|i| result.jacobian[i * n + j]).collect::<Vec<_>>());
        col * result.params[j].abs().max(f64::MIN_POSITIVE) <= 1e-10 * rnorm
    })
}

/// Minimise ‖r(p)‖² robustly: first with the damping alone; if that does not converge or
/// ends on a plateau ([`is_degenerate`]), again from `p0` inside a trust region of a tenth
/// of ‖D p₀‖, keeping the converged, non-degenerate result with the lower sum of squares.
/// Both are deterministic, so a fit is reproducible.
pub fn minimise<M: Residuals>(model: &M, p0: &[f64], opts: &LmOptions) -> LmResult {
    let free = levenberg_marquardt(model, p0, &LmOptions { initial_step_bound: None, ..*opts });
    let good = |r: &LmResult| r.termination.converged() && !is_degenerate(r, model.len());
    if good(&free) {
        return free;
    }
    let bounded = levenberg_marquardt(
        model,
        p0,
        &LmOptions { initial_step_bound: Some(opts.initial_step_bound.unwrap_or(0.1)), ..*opts },
    );
    match (good(&free), good(&bounded)) {
        (_, true) if !good(&free) || bounded.ssr < free.ssr => bounded,
        (true, _) => free,
        _ if bounded.termination.converged() && !free.termination.converged() => bounded,
        _ => free,
    }
}

/// The solution u of min ‖J D⁻¹ u + r‖² + μ‖u‖², by QR of the stacked matrix.
fn damped_step(jac: &[f64], r: &[f64], d: &[f64], mu: f64, m: usize, n: usize) -> Option<Vec<f64>> {
    let rows = m + n;
    let mut a = vec![0.0; rows * n];
    for i in 0..m {
        for j in 0..n {
            a[i * n + j] = jac[i * n + j] / d[j];
        }
    }
    for j in 0..n {
        a[(m + j) * n + j] = mu.sqrt();
    }
    let mut b: Vec<f64> = r.iter().map(|x| -x).chain(std::iter::repeat_n(0.0, n)).collect();
    qr_solve(&mut a, rows, n, &mut b)
}

/// (JᵀJ)⁻¹ for an m × n Jacobian (row-major), from the QR factors of the column-scaled J, so
/// that the conditioning is that of J, not of JᵀJ. Multiplied by s² = SSR/(m − n) it is the
/// parameter covariance of a least-squares fit (linearised; e.g. NIST/SEMATECH e-Handbook of
/// Statistical Methods, section 4.4.4). `None` when J is rank deficient.
pub fn inverse_normal_matrix(jac: &[f64], m: usize, n: usize) -> Option<Vec<f64>> {
    let scale: Vec<f64> = (0..n).map(|j| norm(&(0..m).map(|i| jac[i * n + j]).collect::<Vec<_>>())).collect();
    if scale.contains(&0.0) {
        return None;
    }
    let mut a: Vec<f64> = (0..m * n).map(|k| jac[k] / scale[k % n]).collect();
    let r_diag = householder(&mut a, m, n, None)?;
    // R⁻¹ (upper triangular) by back substitution, column by column.
    let r = |i: usize, j: usize| if i == j { r_diag[i] } else { a[i * n + j] };
    let mut rinv = vec![0.0; n * n];
    for col in 0..n {
        for i in (0..=col).rev() {
            let rhs = if i == col { 1.0 } else { 0.0 };
            let s: f64 = (i + 1..=col).map(|k| r(i, k) * rinv[k * n + col]).sum();
            rinv[i * n + col] = (rhs - s) / r(i, i);
        }
    }
    // (JᵀJ)⁻¹ = S⁻¹ R⁻¹ R⁻ᵀ S⁻¹.
    let mut out = vec![0.0; n * n];
    for i in 0..n {
        for j in 0..n {
            let s: f64 = (i.max(j)..n).map(|k| rinv[i * n + k] * rinv[j * n + k]).sum();
            out[i * n + j] = s / (scale[i] * scale[j]);
        }
    }
    Some(out)
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    /// Straight line y = a + b x through exact points.
    struct Line {
        x: Vec<f64>,
        y: Vec<f64>,
    }

    impl Residuals for Line {
        fn len(&self) -> usize {
            self.x.len()
        }
        fn eval(&self, p: &[f64], r: &mut [f64], jac: &mut [f64]) -> bool {
            for (i, (x, y)) in self.x.iter().zip(&self.y).enumerate() {
                r[i] = p[0] + p[1] * x - y;
                jac[2 * i] = 1.0;
                jac[2 * i + 1] = *x;
            }
            true
        }
    }

    #[test]
    fn linear_fit_and_its_covariance() {
        // x = 0, 1, 2, 3; y = 1 + 2x + (+1, −1, −1, +1)·0.1: the least-squares line is
        // a = 1, b = 2 (the perturbation is orthogonal to 1 and x); (XᵀX)⁻¹ for x = 0..3
        // is [[0.7, −0.3], [−0.3, 0.2]] (worked by hand).
        let line = Line { x: vec![0.0, 1.0, 2.0, 3.0], y: vec![1.1, 2.9, 4.9, 7.1] };
        let fit = levenberg_marquardt(&line, &[0.0, 0.0], &LmOptions::default());
        assert!(fit.termination.converged(), "{:?}", fit.termination);
        assert_relative_eq!(fit.params[0], 1.0, max_relative = 1e-12);
        assert_relative_eq!(fit.params[1], 2.0, max_relative = 1e-12);
        let inv = inverse_normal_matrix(&fit.jacobian, 4, 2).expect("full rank");
        for (got, want) in inv.iter().zip([0.7, -0.3, -0.3, 0.2]) {
            assert_relative_eq!(*got, want, max_relative = 1e-12);
        }
    }

    #[test]
    fn a_parameter_the_model_ignores_has_no_covariance() {
        // The second column is zero: no information on that parameter.
        assert!(inverse_normal_matrix(&[1.0, 0.0, 2.0, 0.0], 2, 2).is_none());
    }
}
