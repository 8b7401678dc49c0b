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
//!
//! The method is an argmin [`Solver`] over argmin's problem traits ([`Operator`] for the
//! residuals, [`Jacobian`]), run by argmin's [`Executor`] with an observer that logs each
//! iteration; [`Residuals`] stays the project's model interface.

use argmin::core::observers::{Observe, ObserverMode};
use argmin::core::{
    Error, Executor, IterState, Jacobian, KvValue, Operator, Problem, Solver, State, TerminationReason,
    TerminationStatus, KV,
};
use argmin::kv;

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

/// The state argmin keeps of the minimiser: the parameters and the sum of squares. The
/// residuals and the Jacobian stay in [`LevenbergMarquardt`], so no iteration copies them.
type LmState = IterState<Vec<f64>, (), (), (), (), f64>;

/// What `init` and `next_iter` return: the new state and the values for the observer.
type Step = Result<(LmState, Option<KV>), Error>;

/// A [`Residuals`] model as an argmin problem: its [`Operator`] gives the residuals at p,
/// its [`Jacobian`] the Jacobian at a point whose residuals are known. Either is `None`
/// where the model cannot be evaluated; the solver checks that the values are finite.
struct LeastSquares<'a, M> {
    model: &'a M,
}

/// Parameters with their residuals: where an accepted step wants the Jacobian.
struct Point {
    params: Vec<f64>,
    residuals: Vec<f64>,
}

impl<M: Residuals> Operator for LeastSquares<'_, M> {
    type Param = Vec<f64>;
    type Output = Option<Vec<f64>>;

    /// The m residuals at `p` ([`Residuals::residuals`]).
    fn apply(&self, p: &Vec<f64>) -> Result<Option<Vec<f64>>, Error> {
        let mut r = vec![0.0; self.model.len()];
        Ok(self.model.residuals(p, &mut r).then_some(r))
    }
}

impl<M: Residuals> Jacobian for LeastSquares<'_, M> {
    type Param = Point;
    type Jacobian = Option<Vec<f64>>;

    /// The m × n Jacobian (row-major) at `at` ([`Residuals::jacobian`]).
    fn jacobian(&self, at: &Point) -> Result<Option<Vec<f64>>, Error> {
        let mut jac = vec![0.0; at.residuals.len() * at.params.len()];
        Ok(self.model.jacobian(&at.params, &at.residuals, &mut jac).then_some(jac))
    }
}

/// The Levenberg–Marquardt method of this module's documentation as an argmin [`Solver`]:
/// `init` evaluates the start and sets the scaling, `next_iter` takes one damped step
/// (accepted or rejected), `terminate` holds the tests made before each step (zero
/// residuals, gradient). The working vectors live here, not in the argmin state.
struct LevenbergMarquardt {
    /// Tolerances and the trust-region setting.
    opts: LmOptions,
    /// Current parameters p.
    p: Vec<f64>,
    /// Residuals at p.
    r: Vec<f64>,
    /// Jacobian at p, row-major m × n.
    jac: Vec<f64>,
    /// Marquardt's scaling D: the running maximum of the column norms of J.
    d: Vec<f64>,
    /// Damping μ.
    mu: f64,
    /// Factor ν that raises μ after a rejected step.
    nu: f64,
    /// Bound on the scaled step ‖D h‖ (infinite without a trust region).
    bound: f64,
    /// Residual evaluations so far.
    evaluations: usize,
    /// Why it stopped, once it has.
    termination: Option<Termination>,
}

impl LevenbergMarquardt {
    fn new(p0: &[f64], m: usize, opts: &LmOptions) -> Self {
        LevenbergMarquardt {
            opts: *opts,
            p: p0.to_vec(),
            r: vec![0.0; m],
            jac: vec![0.0; m * p0.len()],
            d: Vec::new(),
            mu: 1e-3,
            nu: 2.0,
            bound: f64::INFINITY,
            evaluations: 0,
            termination: None,
        }
    }

    /// The tests made before a step, in order: residuals zero, then every column of J
    /// orthogonal to the residuals within `gtol` (the cosine test of MINPACK).
    fn stationary(&self) -> Option<Termination> {
        let (m, n) = (self.r.len(), self.p.len());
        let rnorm = norm(&self.r);
        if rnorm == 0.0 {
            return Some(Termination::ZeroResiduals);
        }
        let cols = column_norms(&self.jac, m, n);
        let gmax = (0..n)
            .filter(|&j| cols[j] > 0.0)
            .map(|j| ((0..m).map(|i| self.jac[i * n + j] * self.r[i]).sum::<f64>() / (cols[j] * rnorm)).abs())
            .fold(0.0, f64::max);
        (gmax <= self.opts.gtol).then_some(Termination::SmallGradient)
    }

    /// The argmin state after a step: parameters, sum of squares and the damping for the
    /// observer; stopped with `termination` if given.
    fn report(&mut self, state: LmState, termination: Option<Termination>) -> (LmState, Option<KV>) {
        let state = state.param(self.p.clone()).cost(sum_of_squares(&self.r));
        let kv = kv!("damping" => self.mu;);
        self.termination = termination;
        match termination {
            Some(t) => (state.terminate_with(reason(t)), Some(kv)),
            None => (state, Some(kv)),
        }
    }
}

/// Σ r_i², summed in order.
fn sum_of_squares(r: &[f64]) -> f64 {
    r.iter().map(|x| x * x).sum()
}

/// The Euclidean norm of each column of a row-major m × n matrix.
fn column_norms(jac: &[f64], m: usize, n: usize) -> Vec<f64> {
    (0..n).map(|j| norm(&(0..m).map(|i| jac[i * n + j]).collect::<Vec<_>>())).collect()
}

/// ‖D p‖.
fn scaled_norm(p: &[f64], d: &[f64]) -> f64 {
    norm(&p.iter().zip(d).map(|(p, d)| p * d).collect::<Vec<_>>())
}

/// argmin's name for a stop: converged for the convergence tests, else the variant's name.
fn reason(termination: Termination) -> TerminationReason {
    if termination.converged() {
        TerminationReason::SolverConverged
    } else {
        TerminationReason::SolverExit(format!("{termination:?}"))
    }
}

impl<M: Residuals> Solver<LeastSquares<'_, M>, LmState> for LevenbergMarquardt {
    fn name(&self) -> &str {
        "Levenberg-Marquardt"
    }

    /// Residuals and Jacobian at p₀; the scaling D from the Jacobian's column norms (1 for
    /// a zero column); the first trust-region bound from ‖D p₀‖.
    fn init(&mut self, problem: &mut Problem<LeastSquares<'_, M>>, state: LmState) -> Step {
        let (m, n) = (self.r.len(), self.p.len());
        self.evaluations += 1;
        let start = match problem.apply(&self.p)? {
            Some(r) if r.iter().all(|x| x.is_finite()) => {
                let at = Point { params: self.p.clone(), residuals: r };
                let jac = problem.jacobian(&at)?;
                self.r = at.residuals;
                jac.filter(|j| j.iter().all(|x| x.is_finite()))
            }
            Some(r) => {
                self.r = r;
                None
            }
            None => {
                self.r = vec![f64::NAN; m];
                None
            }
        };
        let Some(jac) = start else {
            return Ok(self.report(state, Some(Termination::ModelFailed)));
        };
        self.jac = jac;
        self.d = column_norms(&self.jac, m, n).iter().map(|c| if *c > 0.0 { *c } else { 1.0 }).collect();
        if let Some(f) = self.opts.initial_step_bound {
            let n0 = scaled_norm(&self.p, &self.d);
            self.bound = f * if n0 > 0.0 { n0 } else { 1.0 };
        }
        Ok(self.report(state, None))
    }

    /// One step: the damped step u from [J D⁻¹; √μ I] u = [−r; 0], h = D⁻¹ u, with μ raised
    /// until it is inside the trust region; the trial p + h, the gain ratio ρ, and then
    /// either the step taken (μ lowered, D and the bound updated) or μ raised.
    fn next_iter(&mut self, problem: &mut Problem<LeastSquares<'_, M>>, state: LmState) -> Step {
        let (m, n) = (self.r.len(), self.p.len());
        let rnorm = norm(&self.r);
        let mut u = None;
        for _ in 0..64 {
            match damped_step(&self.jac, &self.r, &self.d, self.mu, m, n) {
                Some(step) if norm(&step) <= self.bound => {
                    u = Some(step);
                    break;
                }
                Some(_) | None => self.mu = (self.mu * 4.0).max(1e-12),
            }
        }
        let Some(u) = u else {
            return Ok(self.report(state, Some(Termination::SmallStep)));
        };
        let h: Vec<f64> = u.iter().zip(&self.d).map(|(u, d)| u / d).collect();
        let dp = norm(&u);
        let dx = scaled_norm(&self.p, &self.d);
        let trial: Vec<f64> = self.p.iter().zip(&h).map(|(p, h)| p + h).collect();
        // Predicted reduction ‖r‖² − ‖r + J h‖² = ‖J h‖² + 2μ‖D h‖², the second form free of
        // cancellation (it uses (JᵀJ + μ DᵀD) h = −Jᵀr; Moré 1978, section 4).
        let jh: Vec<f64> = (0..m).map(|i| (0..n).map(|j| self.jac[i * n + j] * h[j]).sum::<f64>()).collect();
        let ssr = rnorm * rnorm;
        let predicted = norm(&jh).powi(2) + 2.0 * self.mu * dp * dp;
        self.evaluations += 1;
        let r_new = problem.apply(&trial)?.filter(|r| r.iter().all(|x| x.is_finite()));
        let actual = r_new.as_ref().map_or(f64::NEG_INFINITY, |r| ssr - norm(r).powi(2));
        let rho = if predicted > 0.0 { actual / predicted } else { -1.0 };
        // Near the minimum both reductions fall below the rounding of ‖r‖²; the ratio is then
        // noise, and a step the linear model predicts to be that small is taken.
        let at_rounding =
            r_new.is_some() && predicted <= 16.0 * f64::EPSILON * ssr && actual >= -16.0 * f64::EPSILON * ssr;
        // The Jacobian is needed only where the step is taken; a model that cannot give it
        // there rejects the step.
        let mut taken = None;
        if let Some(residuals) = r_new.filter(|_| rho > 0.0 || at_rounding) {
            let at = Point { params: trial, residuals };
            if let Some(jac) = problem.jacobian(&at)?.filter(|j| j.iter().all(|x| x.is_finite())) {
                taken = Some((at, jac));
            }
        }
        let bounded = self.opts.initial_step_bound.is_some();
        if let Some((at, jac)) = taken {
            self.p = at.params;
            self.r = at.residuals;
            self.jac = jac;
            for (dj, c) in self.d.iter_mut().zip(column_norms(&self.jac, m, n)) {
                *dj = dj.max(c);
            }
            self.mu *= if rho > 0.0 { (1.0 - (2.0 * rho - 1.0).powi(3)).max(1.0 / 3.0) } else { 1.0 / 3.0 };
            self.nu = 2.0;
            if bounded && (rho > 0.75 || at_rounding) {
                self.bound = self.bound.max(3.0 * dp);
            } else if bounded && rho < 0.25 {
                self.bound = 0.5 * self.bound.min(dp).max(f64::MIN_POSITIVE);
            }
            let ftol = self.opts.ftol;
            if ftol > 0.0 && actual.abs() <= ftol * ssr && predicted <= ftol * ssr && rho <= 2.0 {
                return Ok(self.report(state, Some(Termination::SmallReduction)));
            }
        } else {
            self.mu *= self.nu;
            self.nu *= 2.0;
            if bounded {
                self.bound = 0.5 * dp;
            }
        }
        let small_step = dp <= self.opts.xtol * dx;
        Ok(self.report(state, small_step.then_some(Termination::SmallStep)))
    }

    /// Stops where `init` or the last step did, else on the tests made before a step;
    /// never after the last iteration, which argmin reports as the iteration limit.
    fn terminate(&mut self, state: &LmState) -> TerminationStatus {
        if self.termination.is_none() && state.get_iter() < state.get_max_iters() {
            self.termination = self.stationary();
        }
        self.termination.map_or(TerminationStatus::NotTerminated, |t| TerminationStatus::Terminated(reason(t)))
    }
}

/// Logs each iteration at trace level: its number, the sum of squares and the damping μ.
struct TraceIterations;

impl Observe<LmState> for TraceIterations {
    fn observe_iter(&mut self, state: &LmState, kv: &KV) -> Result<(), Error> {
        tracing::trace!(
            iteration = state.get_iter() + 1,
            cost = state.get_cost(),
            damping = kv.get("damping").and_then(KvValue::get_float).unwrap_or(f64::NAN),
            "least squares: iteration"
        );
        Ok(())
    }
}

/// Minimise ‖r(p)‖² from `p0`: the Levenberg–Marquardt solver of this module run by
/// argmin's [`Executor`] for at most `opts.max_iterations` iterations. Logs each iteration
/// (sum of squares, damping) at trace level, and why it stopped, the iterations and the
/// final sum of squares at debug level.
pub fn levenberg_marquardt<M: Residuals>(model: &M, p0: &[f64], opts: &LmOptions) -> LmResult {
    let solver = LevenbergMarquardt::new(p0, model.len(), opts);
    let run = Executor::new(LeastSquares { model }, solver)
        .configure(|state| state.max_iters(u64::try_from(opts.max_iterations).unwrap_or(u64::MAX)))
        .add_observer(TraceIterations, ObserverMode::Always)
        .run()
        .expect("neither the solver nor its observer returns an error: a model that fails rejects the step");
    let iterations = usize::try_from(run.state.get_iter()).unwrap_or(usize::MAX);
    let lm = run.solver;
    let termination = lm.termination.unwrap_or(Termination::IterationLimit);
    let ssr = sum_of_squares(&lm.r);
    tracing::debug!(?termination, iterations, evaluations = lm.evaluations, cost = ssr, "least squares: stopped");
    LmResult { params: lm.p, ssr, iterations, evaluations: lm.evaluations, termination, jacobian: lm.jac }
}

/// Whether a result sits on a plateau of the model: some parameter no longer changes the
/// residuals (|∂r/∂ln p_j| below 1e-10 ‖r‖), so the stationary point says nothing about it.
pub fn is_degenerate(result: &LmResult, m: usize) -> bool {
    let n = result.params.len();
    let rnorm = result.ssr.sqrt();
    let cols = column_norms(&result.jacobian, m, n);
    (0..n).any(|j| cols[j] * result.params[j].abs().max(f64::MIN_POSITIVE) <= 1e-10 * rnorm)
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
    let scale = column_norms(jac, m, n);
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
        // 1e-12 (here and below): the default options iterate until rounding stops progress
        // (xtol 1e-15); a QR solve of a 4 × 2 system and a 2 × 2 inverse lose at most the
        // condition number of XᵀX (≈ 15) times a few ε (measured exact).
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
