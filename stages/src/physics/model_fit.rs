//! χ² fits of a model curve to a measured angular distribution, with bounded parameters,
//! the common normalisation as a nuisance parameter, parameter errors and correlations from
//! the curvature matrix, χ²/ν and its p-value, profile-likelihood intervals (crossings by
//! argmin's Brent root finder), and several
//! starts with every distinct minimum kept.
//!
//! The χ² (common practice; the normalisation treatment follows G. D'Agostini, Nucl.
//! Instrum. Meth. A 346 (1994) 306, which shows that a fit with a full covariance matrix
//! holding a normalisation error built from the measured values is biased low — citation
//! from memory):
//!     χ²(p, ν) = Σ_i (ν m_i(p) − y_i)² / σ_i² + (ν − 1)² / σ_N²,
//! where σ_i is the statistical and point-to-point error of point i added in quadrature,
//! σ_N the relative error of the common normalisation, and ν the fitted normalisation
//! (`Prior`); `Free` drops the prior term (a free scale), `Fixed` holds ν = 1.
//!
//! Points measured as few counts enter instead through the Poisson likelihood ratio of
//! S. Baker and R. D. Cousins, Nucl. Instrum. Methods 221 (1984) 437, Eq. (9), on counts:
//!     χ²_λ = 2 Σ_i [μ_i − n_i + n_i ln(n_i/μ_i)],   μ_i = ν m_i(p)/k_i + b_i,
//! with n_i the observed (gross) counts, b_i the known background under the peak and k_i the
//! cross section per signal count (mb/sr), and n ln(n/μ) = 0 for n = 0. Like the χ² it is a
//! sum of squares, of the signed deviance residuals
//!     r_i = sign(μ_i − n_i) √(2[μ_i − n_i + n_i ln(n_i/μ_i)])
//! (P. McCullagh, J. A. Nelder, Generalized Linear Models, 2nd ed., Chapman & Hall 1989,
//! section 2.4.3; common practice), so the same Levenberg–Marquardt minimiser serves both and
//! the reported χ² is the sum of both kinds of terms (asymptotically χ²-distributed, Baker and
//! Cousins section 3).
//!
//! Bounds by the usual transformations to an unbounded internal variable q (F. James,
//! M. Roos, "MINUIT", CERN Program Library D506, section on parameter limits — citation
//! from memory):
//!     both bounds:   p = a + (b − a)(sin q + 1)/2
//!     lower only:    p = a − 1 + √(q² + 1)
//!     upper only:    p = b + 1 − √(q² + 1)
//! The covariance is computed in the external parameters at the minimum, from the
//! Jacobian of the residuals by central differences: C = (JᵀJ)⁻¹ (the residuals are already
//! divided by their errors, so no scale factor; e.g. NIST/SEMATECH e-Handbook of
//! Statistical Methods, section 4.4.4). A parameter at a bound has no reliable error and is
//! flagged.

use std::cell::{Cell, RefCell};

use argmin::core::{CostFunction, Error, Executor, State, TerminationReason};
use argmin::solver::brent::BrentRoot;
use statrs::distribution::{ChiSquared, ContinuousCDF};

use super::least_squares::{inverse_normal_matrix, minimise, LmOptions, Residuals, Termination};
use super::optical::OpticalError;
use super::PhysicsError;

/// Why a model curve cannot be evaluated at some parameters.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum ShapeError {
    /// A parameter outside the range where the model is defined.
    #[error("{name} must be {expected}, found {value}")]
    Parameter {
        /// The parameter's key (e.g. `real.r0_fm`).
        name: String,
        /// Its value.
        value: f64,
        /// What is accepted.
        expected: &'static str,
    },
    /// A point outside the model's table (no extrapolation is done).
    #[error(transparent)]
    Physics(#[from] PhysicsError),
    /// The optical model could not be solved.
    #[error(transparent)]
    Optical(#[from] OpticalError),
}

/// A model curve: values at the data points for the shape parameters.
pub trait Shape {
    /// Fill `out` (one value per point) at parameters `p`.
    ///
    /// # Errors
    /// Parameters where the model cannot be evaluated, with the reason.
    fn values(&self, p: &[f64], out: &mut [f64]) -> Result<(), ShapeError>;
    /// Whether the values are linear in the parameters and the start values already solve
    /// the linear least-squares problem (then, with a fixed normalisation, no iteration is
    /// needed).
    fn solved_linear(&self) -> bool {
        false
    }
}

/// One fitted parameter of a shape.
#[derive(Debug, Clone, PartialEq)]
pub struct Parameter {
    /// Name (e.g. `real.depth_mev`).
    pub name: String,
    /// Start value.
    pub start: f64,
    /// Lower bound.
    pub min: Option<f64>,
    /// Upper bound.
    pub max: Option<f64>,
}

/// How the common normalisation enters.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Normalisation {
    /// ν = 1.
    Fixed,
    /// ν fitted without a prior (a free scale).
    Free,
    /// ν fitted with a Gaussian prior of this relative width around 1.
    Prior(f64),
}

/// Name of the normalisation parameter in results.
pub const NORMALISATION: &str = "normalisation";

/// The measured points: values and their errors (statistical ⊕ point-to-point), and for
/// the points fitted by the Poisson likelihood their counts.
#[derive(Debug, Clone, PartialEq)]
pub struct Measured {
    /// y_i.
    pub y: Vec<f64>,
    /// σ_i > 0.
    pub sigma: Vec<f64>,
    /// Per point, its counts where it enters through the Poisson likelihood ratio, `None`
    /// where through the χ²; an empty vector: every point through the χ².
    pub counts: Vec<Option<CountsPoint>>,
}

impl Measured {
    /// Points that all enter through the χ².
    pub fn gaussian(y: Vec<f64>, sigma: Vec<f64>) -> Self {
        Measured { y, sigma, counts: Vec::new() }
    }

    /// The counts of point i, if it enters through the Poisson likelihood ratio.
    pub fn counts_at(&self, i: usize) -> Option<CountsPoint> {
        self.counts.get(i).copied().flatten()
    }

    fn any_counts(&self) -> bool {
        self.counts.iter().any(Option::is_some)
    }
}

/// A point measured as counts: n observed (gross) counts on a known background b, and the
/// cross section k of one signal count, so that a model value f (mb/sr) expects
/// μ = f/k + b counts.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CountsPoint {
    /// Observed counts n ≥ 0.
    pub counts: f64,
    /// Known background counts b ≥ 0.
    pub background: f64,
    /// Cross section per signal count k > 0, mb/sr.
    pub mb_sr_per_count: f64,
}

impl CountsPoint {
    /// Expected counts μ = f/k + b for a model cross section f in mb/sr.
    pub fn expected(&self, model_mb_sr: f64) -> f64 {
        model_mb_sr / self.mb_sr_per_count + self.background
    }
}

/// Signed deviance residual of n observed Poisson counts for expected μ:
///     r = sign(μ − n) √(2[μ − n + n ln(n/μ)]),   n ln(n/μ) = 0 for n = 0,
/// whose square is the point's term of the Baker–Cousins χ²_λ (Nucl. Instrum. Methods 221
/// (1984) 437, Eq. 9; the residual: McCullagh and Nelder 1989, section 2.4.3). NaN for μ ≤ 0
/// with n > 0 or μ < 0 (no Poisson mean), so that a minimiser step there is refused.
pub fn deviance_residual(n: f64, mu: f64) -> f64 {
    if mu < 0.0 || (mu <= 0.0 && n > 0.0) {
        return f64::NAN;
    }
    // With t = (μ − n)/n: μ − n + n ln(n/μ) = n [t − ln(1 + t)], computed without the
    // cancellation of the plain form near μ = n (by its Taylor series for |t| < 1e-3, whose
    // first omitted term t⁷/7 is below 1e-16 of the sum).
    let half_d = if n > 0.0 {
        let t = (mu - n) / n;
        let g = if t.abs() < 1e-3 {
            t * t * (0.5 - t * (1.0 / 3.0 - t * (0.25 - t * (0.2 - t / 6.0))))
        } else {
            t - t.ln_1p()
        };
        n * g
    } else {
        mu
    };
    let root = (2.0 * half_d.max(0.0)).sqrt();
    if mu >= n {
        root
    } else {
        -root
    }
}

/// dr/dμ of [`deviance_residual`]: |1 − n/μ| / √(2[μ − n + n ln(n/μ)]), which tends to 1/√n
/// as μ → n (second-order expansion of the logarithm; near μ = n, where both numerator and
/// denominator vanish, that limit 1/√μ is used).
pub fn deviance_slope(n: f64, mu: f64) -> f64 {
    let r = deviance_residual(n, mu);
    if (mu - n).abs() <= 1e-6 * mu.max(1.0) {
        return 1.0 / mu.max(f64::MIN_POSITIVE).sqrt();
    }
    (1.0 - n / mu).abs() / r.abs()
}

/// Why a fit cannot start.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum FitError {
    /// A start value outside its bounds, or bounds that are not ordered.
    #[error("parameter {name}: start {start} is outside its bounds [{min}, {max}]")]
    StartOutsideBounds {
        /// Parameter.
        name: String,
        /// Start.
        start: f64,
        /// Lower bound (−inf if none).
        min: f64,
        /// Upper bound (+inf if none).
        max: f64,
    },
    /// More free parameters than constraints.
    #[error("{free} free parameters but only {points} data points (and {priors} priors): the fit is underdetermined")]
    TooFewPoints {
        /// Free parameters including the normalisation.
        free: usize,
        /// Data points.
        points: usize,
        /// Prior terms.
        priors: usize,
    },
    /// The model cannot be evaluated at the start.
    #[error("the model cannot be evaluated at the start values: {0}")]
    StartFails(ShapeError),
    /// The model cannot be evaluated, or gives a non-finite value, at the point where the
    /// minimiser stopped.
    #[error("the model cannot be evaluated (or gives a non-finite value) where the minimiser stopped")]
    EndFails,
}

/// A parameter's result.
#[derive(Debug, Clone, PartialEq)]
pub struct Estimate {
    /// Name.
    pub name: String,
    /// Best value.
    pub value: f64,
    /// Standard error from the curvature matrix (`None` if it is singular or the parameter
    /// sits at a bound).
    pub error: Option<f64>,
    /// Start value.
    pub start: f64,
    /// Bounds.
    pub min: Option<f64>,
    /// Bounds.
    pub max: Option<f64>,
    /// Whether the value is at (within 1e-6 of the range of) a bound.
    pub at_bound: bool,
}

/// The outcome of one minimisation.
#[derive(Debug, Clone, PartialEq)]
pub struct Minimum {
    /// Parameters, the shape's first, then the normalisation if fitted.
    pub estimates: Vec<Estimate>,
    /// Covariance matrix (row-major, same order), if the curvature matrix is regular.
    pub covariance: Option<Vec<f64>>,
    /// χ² at the minimum (prior term included).
    pub chi2: f64,
    /// Degrees of freedom: points + priors − free parameters.
    pub ndf: usize,
    /// P(χ²_ν ≥ χ²).
    pub p_value: Option<f64>,
    /// Why the minimiser stopped.
    pub termination: Termination,
    /// Iterations.
    pub iterations: usize,
    /// Model evaluations (including the Jacobians).
    pub evaluations: usize,
    /// Model values (unnormalised) at the points, at the minimum.
    pub model: Vec<f64>,
}

impl Minimum {
    /// Whether the minimiser converged.
    pub fn converged(&self) -> bool {
        self.termination.converged()
    }

    /// The fitted normalisation ν (1 when fixed).
    pub fn normalisation(&self) -> f64 {
        self.estimates.iter().find(|e| e.name == NORMALISATION).map_or(1.0, |e| e.value)
    }

    /// Correlation matrix from the covariance.
    pub fn correlations(&self) -> Option<Vec<f64>> {
        let c = self.covariance.as_ref()?;
        let n = self.estimates.len();
        Some((0..n * n).map(|k| c[k] / (c[(k / n) * n + k / n] * c[(k % n) * n + k % n]).sqrt()).collect())
    }
}

/// Settings of a fit.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FitOptions {
    /// Iteration limit of the minimiser.
    pub max_iterations: usize,
    /// Relative χ² reduction that counts as converged.
    pub ftol: f64,
    /// Relative step that counts as converged.
    pub xtol: f64,
}

impl Default for FitOptions {
    fn default() -> Self {
        FitOptions { max_iterations: 200, ftol: 1e-10, xtol: 1e-9 }
    }
}

fn transform_check(p: &Parameter) -> Result<(), FitError> {
    let (lo, hi) = (p.min.unwrap_or(f64::NEG_INFINITY), p.max.unwrap_or(f64::INFINITY));
    if !(p.start.is_finite() && lo <= p.start && p.start <= hi && lo < hi) {
        return Err(FitError::StartOutsideBounds { name: p.name.clone(), start: p.start, min: lo, max: hi });
    }
    Ok(())
}

/// External value from the internal one.
fn external(p: &Parameter, q: f64) -> f64 {
    match (p.min, p.max) {
        (Some(a), Some(b)) => a + (b - a) * (q.sin() + 1.0) / 2.0,
        (Some(a), None) => a - 1.0 + (q * q + 1.0).sqrt(),
        (None, Some(b)) => b + 1.0 - (q * q + 1.0).sqrt(),
        (None, None) => q,
    }
}

/// Internal value from the external one (the inverse of [`external`]).
fn internal(p: &Parameter, x: f64) -> f64 {
    match (p.min, p.max) {
        (Some(a), Some(b)) => (2.0 * (x - a) / (b - a) - 1.0).clamp(-1.0, 1.0).asin(),
        (Some(a), None) => ((x - a + 1.0).powi(2) - 1.0).max(0.0).sqrt(),
        (None, Some(b)) => ((b - x + 1.0).powi(2) - 1.0).max(0.0).sqrt(),
        (None, None) => x,
    }
}

/// dp/dq.
fn slope(p: &Parameter, q: f64) -> f64 {
    match (p.min, p.max) {
        (Some(a), Some(b)) => (b - a) * q.cos() / 2.0,
        (Some(_), None) => q / (q * q + 1.0).sqrt(),
        (None, Some(_)) => -q / (q * q + 1.0).sqrt(),
        (None, None) => 1.0,
    }
}

/// The residual vector of the χ² in the external parameters (shape's, then ν).
struct Chi2<'a, S: Shape> {
    shape: &'a S,
    params: &'a [Parameter],
    data: &'a Measured,
    norm: Normalisation,
    /// Model evaluations so far.
    calls: Cell<usize>,
}

impl<S: Shape> Chi2<'_, S> {
    /// The shape's values, counted.
    fn values(&self, p: &[f64], out: &mut [f64]) -> Result<(), ShapeError> {
        self.calls.set(self.calls.get() + 1);
        self.shape.values(p, out)
    }

    fn n_shape(&self) -> usize {
        self.params.len()
    }
    fn fits_norm(&self) -> bool {
        !matches!(self.norm, Normalisation::Fixed)
    }
    fn rows(&self) -> usize {
        self.data.y.len() + usize::from(matches!(self.norm, Normalisation::Prior(_)))
    }

    /// Residual of point i for the model value f = ν m_i (mb/sr): (f − y_i)/σ_i, or the
    /// deviance residual of its counts.
    fn residual(&self, i: usize, f: f64) -> f64 {
        match self.data.counts_at(i) {
            Some(c) => deviance_residual(c.counts, c.expected(f)),
            None => (f - self.data.y[i]) / self.data.sigma[i],
        }
    }

    /// dr_i = (dr_i/df) df for a change df of the model value f = ν m_i of point i (see
    /// [`Self::residual`]): df/σ_i, or for a point on counts df times the deviance slope over
    /// k; for the covariance (`expected`) of a point on counts df/(k √μ) instead, the slope
    /// of the expected (Fisher) information 1/μ per count (the Gauss–Newton JᵀJ of the
    /// deviance residuals, Σ (1 − n/μ)²/D, is not the curvature of χ²_λ away from μ = n;
    /// Baker and Cousins section 3 take errors from the curvature).
    fn residual_change(&self, i: usize, f: f64, df: f64, expected: bool) -> f64 {
        match self.data.counts_at(i) {
            Some(c) if expected => df / (c.mb_sr_per_count * c.expected(f).max(f64::MIN_POSITIVE).sqrt()),
            Some(c) => df * deviance_slope(c.counts, c.expected(f)) / c.mb_sr_per_count,
            None => df / self.data.sigma[i],
        }
    }

    /// Residuals at external shape parameters `p` and normalisation `nu`; the model values
    /// are left in `m`.
    fn residuals_ext(&self, p: &[f64], nu: f64, m: &mut [f64], r: &mut [f64]) -> bool {
        if self.values(p, m).is_err() {
            return false;
        }
        for (i, mi) in m.iter().enumerate() {
            r[i] = self.residual(i, nu * mi);
        }
        if let Normalisation::Prior(w) = self.norm {
            r[self.data.y.len()] = (nu - 1.0) / w;
        }
        r.iter().all(|x| x.is_finite())
    }

    /// Jacobian of the residuals in the external parameters (with `central`, for the
    /// covariance: central differences and the expected slope of points on counts, see
    /// [`Self::residual_change`]), by finite differences for the
    /// shape (central where both neighbours are inside the bounds, else one-sided) and
    /// analytically for ν.
    fn jacobian_ext(&self, p: &[f64], nu: f64, m: &[f64], central: bool, jac: &mut [f64]) -> bool {
        let (rows, n) = (self.rows(), self.n_shape() + usize::from(self.fits_norm()));
        let pts = self.data.y.len();
        let mut mp = vec![0.0; pts];
        let mut mm = vec![0.0; pts];
        let mut x = p.to_vec();
        for j in 0..self.n_shape() {
            let par = &self.params[j];
            let room = match (par.min, par.max) {
                (Some(a), Some(b)) => 0.25 * (b - a),
                _ => f64::INFINITY,
            };
            let h = ((if central { 6e-6 } else { 1.5e-8 }) * p[j].abs().max(1e-3)).min(room);
            let up_ok = par.max.is_none_or(|b| p[j] + h <= b);
            let down_ok = par.min.is_none_or(|a| p[j] - h >= a);
            let (up, down) = match (central, up_ok, down_ok) {
                (true, true, true) => (h, -h),
                (_, true, _) => (h, 0.0),
                (_, false, true) => (0.0, -h),
                _ => return false,
            };
            x[j] = p[j] + up;
            if up != 0.0 && self.values(&x, &mut mp).is_err() {
                return false;
            }
            if up == 0.0 {
                mp.copy_from_slice(m);
            }
            x[j] = p[j] + down;
            if down != 0.0 && self.values(&x, &mut mm).is_err() {
                return false;
            }
            if down == 0.0 {
                mm.copy_from_slice(m);
            }
            x[j] = p[j];
            for i in 0..pts {
                jac[i * n + j] = self.residual_change(i, nu * m[i], nu * (mp[i] - mm[i]) / (up - down), central);
            }
            if rows > pts {
                jac[pts * n + j] = 0.0;
            }
        }
        if self.fits_norm() {
            let j = self.n_shape();
            for i in 0..pts {
                jac[i * n + j] = self.residual_change(i, nu * m[i], m[i], central);
            }
            if let Normalisation::Prior(w) = self.norm {
                jac[pts * n + j] = 1.0 / w;
            }
        }
        jac.iter().all(|x| x.is_finite())
    }

    /// External parameters (shape, ν) from the internal vector.
    fn to_external(&self, q: &[f64]) -> (Vec<f64>, f64) {
        let p: Vec<f64> = self.params.iter().zip(q).map(|(par, q)| external(par, *q)).collect();
        let nu = if self.fits_norm() { q[self.n_shape()] } else { 1.0 };
        (p, nu)
    }
}

impl<S: Shape> Residuals for Chi2<'_, S> {
    fn len(&self) -> usize {
        self.rows()
    }
    fn eval(&self, q: &[f64], r: &mut [f64], jac: &mut [f64]) -> bool {
        self.residuals(q, r) && self.jacobian(q, r, jac)
    }
    fn residuals(&self, q: &[f64], r: &mut [f64]) -> bool {
        let (p, nu) = self.to_external(q);
        let mut m = vec![0.0; self.data.y.len()];
        self.residuals_ext(&p, nu, &mut m, r)
    }
    fn jacobian(&self, q: &[f64], r: &[f64], jac: &mut [f64]) -> bool {
        let (p, nu) = self.to_external(q);
        // The model values at q follow from the χ² residuals: m_i = (σ_i r_i + y_i)/ν, except
        // at ν = 0 or with points on counts, where they are recomputed.
        let pts = self.data.y.len();
        let m: Vec<f64> = if nu == 0.0 || self.data.any_counts() {
            let mut m = vec![0.0; pts];
            if self.values(&p, &mut m).is_err() {
                return false;
            }
            m
        } else {
            (0..pts).map(|i| (self.data.sigma[i] * r[i] + self.data.y[i]) / nu).collect()
        };
        if !self.jacobian_ext(&p, nu, &m, false, jac) {
            return false;
        }
        // Chain rule to the internal variables.
        let n = q.len();
        for (j, par) in self.params.iter().enumerate() {
            let s = slope(par, q[j]);
            (0..self.rows()).for_each(|i| jac[i * n + j] *= s);
        }
        true
    }
}

/// Fit `shape` to `data` from the parameters' start values (ν starts at 1).
///
/// # Errors
/// Starts outside bounds, too few points, a model that fails at the start.
pub fn fit<S: Shape>(
    shape: &S,
    params: &[Parameter],
    data: &Measured,
    norm: Normalisation,
    opts: &FitOptions,
) -> Result<Minimum, FitError> {
    params.iter().try_for_each(transform_check)?;
    let problem = Chi2 { shape, params, data, norm, calls: Cell::new(0) };
    let free = params.len() + usize::from(problem.fits_norm());
    let priors = problem.rows() - data.y.len();
    if free > problem.rows() {
        return Err(FitError::TooFewPoints { free, points: data.y.len(), priors });
    }
    let mut m = vec![0.0; data.y.len()];
    let start: Vec<f64> = params.iter().map(|p| p.start).collect();
    problem.values(&start, &mut m).map_err(FitError::StartFails)?;
    let mut q0: Vec<f64> = params.iter().map(|p| internal(p, p.start)).collect();
    if problem.fits_norm() {
        q0.push(1.0);
    }
    let (result, iterations, termination) =
        if q0.is_empty() || (shape.solved_linear() && norm == Normalisation::Fixed && !data.any_counts()) {
            (q0.clone(), 0, Termination::Linear)
        } else {
            let lm = LmOptions {
                max_iterations: opts.max_iterations,
                ftol: opts.ftol,
                xtol: opts.xtol,
                gtol: 1e-10,
                initial_step_bound: None,
            };
            let r = minimise(&problem, &q0, &lm);
            (r.params, r.iterations, r.termination)
        };
    let (p, nu) = problem.to_external(&result);
    let mut r = vec![0.0; problem.rows()];
    if !problem.residuals_ext(&p, nu, &mut m, &mut r) {
        return Err(FitError::EndFails);
    }
    let chi2: f64 = r.iter().map(|x| x * x).sum();
    // Covariance in the external parameters, from central differences.
    let n = free;
    let mut jac = vec![0.0; problem.rows() * n];
    let covariance = if n > 0 && problem.jacobian_ext(&p, nu, &m, true, &mut jac) {
        inverse_normal_matrix(&jac, problem.rows(), n)
    } else {
        None
    };
    let mut estimates: Vec<Estimate> = params
        .iter()
        .zip(&p)
        .map(|(par, v)| {
            let range = match (par.min, par.max) {
                (Some(a), Some(b)) => b - a,
                _ => v.abs().max(1.0),
            };
            let near = |b: Option<f64>| b.is_some_and(|b| (v - b).abs() <= 1e-6 * range);
            Estimate {
                name: par.name.clone(),
                value: *v,
                error: None,
                start: par.start,
                min: par.min,
                max: par.max,
                at_bound: near(par.min) || near(par.max),
            }
        })
        .collect();
    if problem.fits_norm() {
        estimates.push(Estimate {
            name: NORMALISATION.into(),
            value: nu,
            error: None,
            start: 1.0,
            min: None,
            max: None,
            at_bound: false,
        });
    }
    if let Some(c) = &covariance {
        for (j, e) in estimates.iter_mut().enumerate() {
            e.error = (!e.at_bound && c[j * n + j] > 0.0).then(|| c[j * n + j].sqrt());
        }
    }
    let ndf = problem.rows() - free;
    let evaluations = problem.calls.get();
    let p_value = (ndf > 0).then(|| ChiSquared::new(ndf as f64).map(|d| d.sf(chi2)).ok()).flatten();
    Ok(Minimum { estimates, covariance, chi2, ndf, p_value, termination, iterations, evaluations, model: m })
}

/// Fit from several starts (each a full set of shape start values) and keep every distinct
/// converged minimum, ranked by χ²; two minima are the same when every parameter agrees
/// within a tenth of its error (or 1e-6 relative where it has none). Non-converged starts
/// are returned after the minima, so nothing is hidden.
///
/// # Errors
/// As [`fit`], for the first start that cannot begin.
pub fn fit_starts<S: Shape>(
    shape: &S,
    params: &[Parameter],
    starts: &[Vec<f64>],
    data: &Measured,
    norm: Normalisation,
    opts: &FitOptions,
) -> Result<Vec<Minimum>, FitError> {
    let mut minima: Vec<Minimum> = Vec::new();
    let mut failed = Vec::new();
    for s in starts {
        let ps: Vec<Parameter> = params.iter().zip(s).map(|(p, v)| Parameter { start: *v, ..p.clone() }).collect();
        let m = fit(shape, &ps, data, norm, opts)?;
        if !m.converged() {
            failed.push(m);
            continue;
        }
        let same = |a: &Minimum| {
            a.estimates.iter().zip(&m.estimates).all(|(x, y)| {
                let tol = match (x.error, y.error) {
                    (Some(e1), Some(e2)) => 0.1 * e1.max(e2),
                    _ => 1e-6 * x.value.abs().max(1e-12),
                };
                (x.value - y.value).abs() <= tol
            })
        };
        match minima.iter().position(same) {
            Some(i) if minima[i].chi2 <= m.chi2 => {}
            Some(i) => minima[i] = m,
            None => minima.push(m),
        }
    }
    minima.sort_by(|a, b| a.chi2.total_cmp(&b.chi2));
    minima.extend(failed);
    Ok(minima)
}

/// A profile-likelihood interval: where χ² minimised over the other parameters rises by 1
/// above the minimum (a 68.3 % interval for one parameter; common practice).
#[derive(Debug, Clone, PartialEq)]
pub struct Profile {
    /// Parameter.
    pub name: String,
    /// Lower end, if found inside the bounds.
    pub lower: Option<f64>,
    /// Upper end, if found inside the bounds.
    pub upper: Option<f64>,
}

/// A shape with one parameter held at a value: the others are its parameters.
struct Held<'a, S: Shape> {
    inner: &'a S,
    index: usize,
    value: f64,
    full: RefCell<Vec<f64>>,
}

impl<S: Shape> Shape for Held<'_, S> {
    fn values(&self, p: &[f64], out: &mut [f64]) -> Result<(), ShapeError> {
        let mut full = self.full.borrow_mut();
        let (before, after) = p.split_at(self.index);
        full[..self.index].copy_from_slice(before);
        full[self.index] = self.value;
        full[self.index + 1..].copy_from_slice(after);
        self.inner.values(&full, out)
    }
}

/// The crossing of the profile χ² with χ²_min + 1 inside a bracket: the root of
///     f(x) = χ²_profile(x) − (χ²_min + 1)
/// between an end where f < 0 and one where f ≥ 0, by Brent's method (inverse quadratic
/// interpolation and secant steps, falling back on bisection so that it is never much
/// slower; R. P. Brent, Algorithms for Minimization without Derivatives, Prentice-Hall
/// 1973, ch. 4), argmin's [`BrentRoot`]. Each evaluation of f is a refit; the two ends are
/// already known, so `known` answers for them.
struct Crossing<F> {
    /// The profile χ² at x: a refit with the parameter held at x.
    chi2_at: F,
    /// χ²_min + 1.
    target: f64,
    /// (x, χ²_profile(x)) at the ends of the bracket: inside, then outside the interval.
    known: [(f64, f64); 2],
}

impl<F: Fn(f64) -> Result<f64, FitError>> CostFunction for Crossing<F> {
    type Param = f64;
    type Output = f64;

    /// f(x); a refit that cannot start is an error carrying its [`FitError`].
    fn cost(&self, x: &f64) -> Result<f64, Error> {
        let chi2 = match self.known.iter().find(|(k, _)| k.to_bits() == x.to_bits()) {
            Some((_, chi2)) => *chi2,
            None => (self.chi2_at)(*x)?,
        };
        Ok(chi2 - self.target)
    }
}

impl<F: Fn(f64) -> Result<f64, FitError>> Crossing<F> {
    /// The root, found when the bracket is narrower than `tol` (Brent's test: half the
    /// bracket below 2ε|x| + tol/2), run by argmin's [`Executor`]; `None` if 100 iterations
    /// do not find it.
    ///
    /// # Errors
    /// A refit that cannot start. (BrentRoot's own errors, ends of the same sign or a
    /// negative tolerance, cannot occur: the ends have f < 0 ≤ f, and `tol` > 0.)
    fn root(self, tol: f64) -> Result<Option<f64>, FitError> {
        let solver = BrentRoot::new(self.known[0].0, self.known[1].0, tol);
        match Executor::new(self, solver).configure(|state| state.max_iters(100)).run() {
            Ok(run) => {
                let converged = matches!(run.state.get_termination_reason(), Some(TerminationReason::SolverConverged));
                Ok(run.state.get_param().copied().filter(|_| converged))
            }
            Err(e) => e.downcast::<FitError>().map_or(Ok(None), Err),
        }
    }
}

/// Profile interval of shape parameter `index` around `best` (its error sets the first
/// step): on each side, the profile χ² is bracketed by doubling steps and the crossing
/// of χ²_min + 1 found by Brent's method to 1e-3 of the error (see `Crossing`).
///
/// # Errors
/// As [`fit`].
pub fn profile<S: Shape>(
    shape: &S,
    params: &[Parameter],
    data: &Measured,
    norm: Normalisation,
    opts: &FitOptions,
    best: &Minimum,
    index: usize,
) -> Result<Profile, FitError> {
    let at: Vec<Parameter> = params
        .iter()
        .zip(&best.estimates)
        .map(|(p, e)| Parameter {
            start: e.value.clamp(p.min.unwrap_or(f64::MIN), p.max.unwrap_or(f64::MAX)),
            ..p.clone()
        })
        .collect();
    let centre = best.estimates[index].value;
    let step0 = best.estimates[index].error.unwrap_or(1e-2 * centre.abs().max(1e-3));
    let target = best.chi2 + 1.0;
    let mut others = at.clone();
    others.remove(index);
    let chi2_at = |x: f64| -> Result<f64, FitError> {
        let held = Held { inner: shape, index, value: x, full: RefCell::new(vec![0.0; params.len()]) };
        Ok(fit(&held, &others, data, norm, opts)?.chi2)
    };
    let side = |dir: f64| -> Result<Option<f64>, FitError> {
        let bound = if dir > 0.0 { params[index].max } else { params[index].min };
        // The profile χ² at the centre is χ²_min.
        let (mut inside, mut step) = ((centre, best.chi2), step0);
        for _ in 0..20 {
            let mut x = centre + dir * step;
            if let Some(b) = bound {
                if (x - b) * dir >= 0.0 {
                    x = b;
                }
            }
            let chi2 = chi2_at(x)?;
            if chi2 >= target {
                let crossing = Crossing { chi2_at: &chi2_at, target, known: [inside, (x, chi2)] };
                return crossing.root(1e-3 * step0);
            }
            if bound.is_some_and(|b| (x - b).abs() <= 0.0) {
                return Ok(None);
            }
            inside = (x, chi2);
            step *= 2.0;
        }
        Ok(None)
    };
    Ok(Profile { name: params[index].name.clone(), lower: side(-1.0)?, upper: side(1.0)? })
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    /// y = a·exp(−b x) at fixed x.
    struct Decay(Vec<f64>);
    impl Shape for Decay {
        fn values(&self, p: &[f64], out: &mut [f64]) -> Result<(), ShapeError> {
            for (o, x) in out.iter_mut().zip(&self.0) {
                *o = p[0] * (-p[1] * x).exp();
            }
            Ok(())
        }
    }

    fn par(name: &str, start: f64, min: Option<f64>, max: Option<f64>) -> Parameter {
        Parameter { name: name.into(), start, min, max }
    }

    #[test]
    fn deviance_residuals_and_their_slopes() {
        // (n, μ, r): worked by hand from r = sign(μ − n)·√(2[μ − n + n ln(n/μ)]).
        let e = std::f64::consts::E;
        let cases = [
            (0.0, 2.0, 2.0),
            (4.0, 4.0, 0.0),
            (1.0, e, (2.0 * (e - 2.0)).sqrt()),
            (5.0, 2.0, -(2.0 * (2.0 - 5.0 + 5.0 * 2.5f64.ln())).sqrt()),
        ];
        for (n, mu, r) in cases {
            // 1e-14: a logarithm, a square root and three sums, rounded once each.
            assert_relative_eq!(deviance_residual(n, mu), r, max_relative = 1e-14, epsilon = 1e-15);
            // The slope against a central difference of step 1e-6: truncation ~ h² times the
            // third derivative ≈ 1e-12, rounding ~ 1e-16/1e-6 = 1e-10; 1e-7 leaves margin.
            let h = 1e-6;
            let numeric = (deviance_residual(n, mu + h) - deviance_residual(n, mu - h)) / (2.0 * h);
            assert_relative_eq!(deviance_slope(n, mu), numeric, max_relative = 1e-7);
        }
        assert!(deviance_residual(1.0, 0.0).is_nan() && deviance_residual(0.0, -1.0).is_nan());
    }

    /// A constant cross section a at every point.
    struct Constant(usize);
    impl Shape for Constant {
        fn values(&self, p: &[f64], out: &mut [f64]) -> Result<(), ShapeError> {
            out.iter_mut().take(self.0).for_each(|o| *o = p[0]);
            Ok(())
        }
    }

    #[test]
    fn a_constant_rate_fitted_on_counts_is_the_mean_count() {
        // For n_i ~ Poisson(μ) with one μ for all points the likelihood is maximal at
        // μ = mean(n) (d/dμ Σ [μ − n_i ln μ] = 0; common practice), whatever the background
        // and scale: here μ_i = a/k + b with k = 0.5 mb/sr per count and b = 1, so
        // a = k (mean(n) − b).
        let n = [3.0, 7.0, 2.0, 5.0, 4.0, 0.0, 6.0];
        let (k, b) = (0.5, 1.0);
        let y: Vec<f64> = n.iter().map(|c| k * (c - b)).collect();
        let sigma: Vec<f64> = n.iter().map(|c: &f64| k * c.max(1.0).sqrt()).collect();
        let counts = n.iter().map(|&c| Some(CountsPoint { counts: c, background: b, mb_sr_per_count: k })).collect();
        let data = Measured { y, sigma, counts };
        let ps = [par("a", 1.0, None, None)];
        let m = fit(&Constant(n.len()), &ps, &data, Normalisation::Fixed, &FitOptions::default()).expect("fits");
        let mean = n.iter().sum::<f64>() / n.len() as f64;
        // 1e-7: the minimiser stops at a relative step of xtol = 1e-9 or a relative fall of
        // the cost of ftol, and a minimum's position is known to √ftol of the cost.
        assert_relative_eq!(m.estimates[0].value, k * (mean - b), max_relative = 1e-7);
        // The error from the curvature: u(a) = k √(mean/N) (Fisher information N/μ, common
        // practice). 1e-5: the Jacobian by central differences (relative step 6e-6).
        let expected_err = k * (mean / n.len() as f64).sqrt();
        assert_relative_eq!(m.estimates[0].error.expect("an error"), expected_err, max_relative = 1e-5);
    }

    #[test]
    fn transforms_invert() {
        for p in [par("a", 0.0, Some(-1.0), Some(3.0)), par("b", 0.0, Some(2.0), None), par("c", 0.0, None, Some(-2.0))]
        {
            for x in [-1.5f64, 0.1, 2.5, 2.9].iter().map(|x| x.clamp(p.min.unwrap_or(-9.0), p.max.unwrap_or(9.0))) {
                // 1e-12: sin∘asin and the square-root pair lose a few ulps, more near a bound
                // where the arcsine's slope (1 − u²)^(-1/2) reaches 5 (x = 2.9 in [−1, 3];
                // measured 8e-16); epsilon 1e-12 for values near 0.
                assert_relative_eq!(external(&p, internal(&p, x)), x, max_relative = 1e-12, epsilon = 1e-12);
            }
        }
    }

    #[test]
    fn exact_data_is_recovered_with_and_without_bounds() {
        let x: Vec<f64> = (0..12).map(|i| f64::from(i) * 0.5).collect();
        let y: Vec<f64> = x.iter().map(|x| 7.0 * (-0.4 * x).exp()).collect();
        let data = Measured::gaussian(y.clone(), y.iter().map(|y| 0.02 * y).collect());
        for bounds in [(None, None), (Some(0.1), Some(2.0))] {
            let ps = [par("a", 3.0, None, None), par("b", 1.0, bounds.0, bounds.1)];
            let m = fit(&Decay(x.clone()), &ps, &data, Normalisation::Fixed, &FitOptions::default()).expect("fits");
            assert!(m.converged(), "{:?}", m.termination);
            // 1e-8: ten times the relative step, xtol = 1e-9, at which the minimiser stops
            // (measured 1e-12).
            assert_relative_eq!(m.estimates[0].value, 7.0, max_relative = 1e-8);
            assert_relative_eq!(m.estimates[1].value, 0.4, max_relative = 1e-8);
            // 1e-12: with the parameters right to 1e-12 each residual (y/σ = 50) is ~1e-10,
            // χ² ~ 1e-19; one point off by 1e-6 of its value would already give 2.5e-9.
            assert!(m.chi2 < 1e-12);
            assert_eq!(m.ndf, 10);
        }
    }

    #[test]
    fn the_normalisation_prior_pulls_a_free_scale_to_its_measured_value() {
        // y = 1.1 × model exactly; a prior of 5 % on ν. With a = 7 and b = 0.4 held the data want ν = 1.1: the compromise minimises
        // Σ((ν − 1.1) m_i/σ_i)² + ((ν − 1)/0.05)², solved by hand for equal σ_i/m_i = 0.02:
        // ν = (12·1.1/0.02² + 1/0.05²)/(12/0.02² + 1/0.05²) .
        let x: Vec<f64> = (0..12).map(|i| f64::from(i) * 0.5).collect();
        let y: Vec<f64> = x.iter().map(|x| 1.1 * 7.0 * (-0.4 * x).exp()).collect();
        let data = Measured::gaussian(y.clone(), y.iter().map(|y| 0.02 * y / 1.1).collect());
        let (shape, inner) = (Decay(x), [Parameter { name: "b".into(), start: 0.4, min: None, max: None }]);
        let held = Held { inner: &shape, index: 0, value: 7.0, full: RefCell::new(vec![0.0; 2]) };
        // Hold b as well: only ν is fitted.
        let only_nu = Held { inner: &held, index: 0, value: inner[0].start, full: RefCell::new(vec![0.0; 1]) };
        let m = fit(&only_nu, &[], &data, Normalisation::Prior(0.05), &FitOptions::default()).expect("fits");
        assert_eq!(m.estimates.len(), 1);
        let want = (12.0 * 1.1 / 4e-4 + 1.0 / 0.0025) / (12.0 / 4e-4 + 1.0 / 0.0025);
        // 1e-8 (tightened from 1e-6): ten times the minimiser's stopping step xtol = 1e-9
        // (measured 3e-12).
        assert_relative_eq!(m.normalisation(), want, max_relative = 1e-8);
    }

    /// y = a + b x.
    struct Line(Vec<f64>);
    impl Shape for Line {
        fn values(&self, p: &[f64], out: &mut [f64]) -> Result<(), ShapeError> {
            for (o, x) in out.iter_mut().zip(&self.0) {
                *o = p[0] + p[1] * x;
            }
            Ok(())
        }
    }

    #[test]
    fn profile_interval_of_a_linear_model_is_plus_minus_one_error() {
        // For a model linear in its parameters χ² is exactly quadratic, so the Δχ² = 1
        // profile interval is value ± standard error (common practice). 2e-3 σ: twice the
        // tolerance 1e-3 σ to which Brent's method brackets each crossing (the refits add
        // ~1e-9 σ).
        let x: Vec<f64> = (0..10).map(f64::from).collect();
        let y: Vec<f64> =
            x.iter().enumerate().map(|(i, x)| 2.0 + 0.5 * x + if i % 2 == 0 { 0.3 } else { -0.2 }).collect();
        let data = Measured::gaussian(y, vec![0.25; 10]);
        let ps = [par("a", 0.0, None, None), par("b", 0.0, None, None)];
        let opts = FitOptions::default();
        let best = fit(&Line(x.clone()), &ps, &data, Normalisation::Fixed, &opts).expect("fits");
        for j in 0..2 {
            let pr = profile(&Line(x.clone()), &ps, &data, Normalisation::Fixed, &opts, &best, j).expect("profile");
            let (v, e) = (best.estimates[j].value, best.estimates[j].error.expect("error"));
            assert!((pr.lower.expect("lower") - (v - e)).abs() < 2e-3 * e, "{pr:?} {v} {e}");
            assert!((pr.upper.expect("upper") - (v + e)).abs() < 2e-3 * e, "{pr:?} {v} {e}");
        }
    }

    #[test]
    fn bad_starts_and_too_few_points_are_errors() {
        let data = Measured::gaussian(vec![1.0, 2.0], vec![0.1, 0.1]);
        let shape = Decay(vec![0.0, 1.0]);
        let outside = [par("a", 5.0, Some(0.0), Some(1.0)), par("b", 0.1, None, None)];
        assert!(matches!(
            fit(&shape, &outside, &data, Normalisation::Fixed, &FitOptions::default()),
            Err(FitError::StartOutsideBounds { .. })
        ));
        let ok = [par("a", 0.5, None, None), par("b", 0.1, None, None)];
        assert!(matches!(
            fit(&shape, &ok, &data, Normalisation::Free, &FitOptions::default()),
            Err(FitError::TooFewPoints { free: 3, points: 2, .. })
        ));
        // A model that refuses its start says which parameter and why.
        let e = fit(&Refuses, &[par("r", -1.0, None, None)], &data, Normalisation::Fixed, &FitOptions::default())
            .expect_err("refused");
        assert_eq!(e.to_string(), "the model cannot be evaluated at the start values: r must be > 0, found -1");
    }

    /// A model defined for r > 0 only.
    struct Refuses;
    impl Shape for Refuses {
        fn values(&self, p: &[f64], out: &mut [f64]) -> Result<(), ShapeError> {
            if p[0] <= 0.0 {
                return Err(ShapeError::Parameter { name: "r".into(), value: p[0], expected: "> 0" });
            }
            out.fill(p[0]);
            Ok(())
        }
    }
}
