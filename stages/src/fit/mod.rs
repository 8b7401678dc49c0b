//! Fits: a model curve fitted to the CM angular distribution of one state, once every run
//! is reduced. Everything about fits lives in this folder:
//! - [`config`]: the config's `fits:` entries and the fit file (`model:` and its settings);
//! - [`data`]: the measured distribution read from a reduced table, and theory curve tables;
//! - [`models`]: the model curves at the data angles, and the optical parameters a fit frees;
//! - [`report`]: what a fit writes (`fit.yaml`, `fit.json`);
//! - this file: [`Fit`], a built fit, which runs the minimisation and draws the best curve.
//!
//! Models (the fit file, tagged by `model:`):
//! - `rutherford`: point-Coulomb scattering in the convention of the data's
//!   `rutherford_convention` (relativistic by default) with a free normalisation;
//! - `legendre`: Σ_l a_l P_l(cos θ_cm) up to `order`, linear in a_l (started at the exact
//!   linear least-squares solution);
//! - `curve`: a theory curve read from a table (θ_cm, dσ/dΩ), interpolated linearly in
//!   ln σ, with a free scale;
//! - `optical`: the optical model of [`crate::theory`] with any subset of its parameters
//!   free, with bounds, and several starts over (for example) the real depth.
//!
//! The χ², the normalisation nuisance parameter, errors, correlations and the p-value are
//! those of [`crate::physics::model_fit`]. Nothing here reads from disk: the pipeline gives
//! the data table and, for `curve`, the curve's points.

pub mod config;
pub mod data;
pub mod models;
pub mod report;
#[cfg(test)]
mod tests;

pub use config::{
    BoundsConfig, FitEntryConfig, FitModelConfig, FitSettings, LikelihoodChoice, NormalisationMode,
    POISSON_BELOW_COUNTS,
};
pub use data::{row_counts, CurveTable, FitData, RowCounts, COUNT_COLUMNS, FIT_COLUMNS, RUTHERFORD_CONVENTION};
pub use models::{OpticalKey, FIT_ACCURACY};
pub use report::{FitReport, MinimumReport, NumericsReport, ParameterReport, PointReport, ProfileReport};

use crate::physics::model_fit::{
    self, deviance_residual, CountsPoint, FitError, FitOptions, Measured, Normalisation, Parameter, Profile, Shape,
    ShapeError,
};
use crate::physics::rutherford::Convention;
use models::{auto_numerics, fixed_numerics, legendre_start, AtAngles, Model, PointCoulomb};
use report::minimum_report;

/// A built fit: the model, the parameters, the settings.
pub struct Fit {
    range_deg: Option<[f64; 2]>,
    model: Model,
    /// The reaction's point-Coulomb scattering, for the ratio to Rutherford of curves.
    coulomb: Option<PointCoulomb>,
    params: Vec<Parameter>,
    /// Start vectors of a multi-start fit (empty: the parameters' own starts).
    starts: Vec<Vec<f64>>,
    mode: NormalisationMode,
    prior_rel_err: Option<f64>,
    profile: Vec<String>,
    likelihood: LikelihoodChoice,
    poisson_below_counts: f64,
    options: FitOptions,
}

/// Why a fit gave no result.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum FitFailure {
    /// The fit could not start.
    #[error("{0}")]
    Setup(#[from] FitError),
    /// The model cannot be evaluated at the parameters where its numerics are chosen.
    #[error("{0}")]
    Model(#[from] ShapeError),
    /// A normalisation prior without a width: neither the fit nor the rows give one.
    #[error(
        "normalisation: prior needs a normalisation error: the rows have norm_rel_err 0; \
         set fit.normalisation_rel_err or use normalisation: fixed"
    )]
    NoPriorWidth,
    /// The fit's angle range holds no data point.
    #[error("no data point of state {state} has θ_cm in [{min_deg}, {max_deg}]°")]
    NoPointsInRange {
        /// The state fitted.
        state: String,
        /// Lower end of the range, degrees.
        min_deg: f64,
        /// Upper end of the range, degrees.
        max_deg: f64,
    },
    /// A data angle where a curve model has no value.
    #[error("data angle {theta_deg}° lies outside the curve ({first_deg}° to {last_deg}°)")]
    OutsideCurve {
        /// The data point's CM angle, degrees.
        theta_deg: f64,
        /// The curve's first angle, degrees.
        first_deg: f64,
        /// The curve's last angle, degrees.
        last_deg: f64,
    },
}

impl Fit {
    /// The CM angles (degrees) where the model is defined: a curve model's table range,
    /// else 1°–179°.
    pub fn angle_range_deg(&self) -> (f64, f64) {
        match &self.model {
            Model::Curve(c) => (c.theta_cm_deg[0].max(1.0), c.theta_cm_deg[c.theta_cm_deg.len() - 1].min(179.0)),
            _ => (1.0, 179.0),
        }
    }

    fn normalisation(&self, data: &FitData, warnings: &mut Vec<String>) -> Result<Normalisation, FitFailure> {
        Ok(match self.mode {
            NormalisationMode::Fixed => Normalisation::Fixed,
            NormalisationMode::Free => Normalisation::Free,
            NormalisationMode::Prior => {
                let w = match self.prior_rel_err {
                    Some(w) => w,
                    None => {
                        let (lo, hi) = data
                            .norm_rel_err
                            .iter()
                            .fold((f64::INFINITY, 0.0f64), |(lo, hi), x| (lo.min(*x), hi.max(*x)));
                        if hi <= 0.0 {
                            return Err(FitFailure::NoPriorWidth);
                        }
                        if hi - lo > 1e-9 * hi {
                            warnings.push(format!(
                                "rows carry normalisation errors from {lo} to {hi}; the prior uses the largest, {hi} \
                                 (set fit.normalisation_rel_err to choose)"
                            ));
                        }
                        hi
                    }
                };
                Normalisation::Prior(w)
            }
        })
    }

    /// The counts a row enters the fit with, if it enters through the Poisson likelihood
    /// (see [`FitSettings::likelihood`]).
    fn on_counts(&self, c: RowCounts) -> Option<CountsPoint> {
        let poisson = c.upper_limit
            || match self.likelihood {
                LikelihoodChoice::Auto => c.gross < self.poisson_below_counts,
                LikelihoodChoice::Poisson => true,
                LikelihoodChoice::Gaussian => false,
            };
        poisson.then_some(CountsPoint { counts: c.gross, background: c.background, mb_sr_per_count: c.mb_sr_per_count })
    }

    /// Fit the model to the data.
    ///
    /// # Errors
    /// A fit that cannot start (bounds, too few points, a model that fails at the start),
    /// data that do not suit the settings. A fit that starts but does not converge is a
    /// report with `converged: false`, not an error.
    pub fn run(
        &self,
        data: &FitData,
        state: &str,
        model_name: &'static str,
    ) -> Result<(FitReport, Vec<f64>), FitFailure> {
        let selected;
        let data = match self.range_deg {
            Some([a, b]) => {
                let keep: Vec<usize> =
                    (0..data.theta_cm_deg.len()).filter(|&i| (a..=b).contains(&data.theta_cm_deg[i])).collect();
                if keep.is_empty() {
                    return Err(FitFailure::NoPointsInRange { state: state.to_string(), min_deg: a, max_deg: b });
                }
                let pick = |v: &Vec<f64>| keep.iter().map(|&i| v[i]).collect::<Vec<f64>>();
                selected = FitData {
                    theta_cm_deg: pick(&data.theta_cm_deg),
                    dsdo_cm_mb_sr: pick(&data.dsdo_cm_mb_sr),
                    err_mb_sr: pick(&data.err_mb_sr),
                    norm_rel_err: pick(&data.norm_rel_err),
                    counts: if data.counts.is_empty() {
                        Vec::new()
                    } else {
                        keep.iter().map(|&i| data.counts[i]).collect()
                    },
                    labels: keep.iter().map(|&i| data.labels[i].clone()).collect(),
                    rutherford_convention: data.rutherford_convention,
                };
                &selected
            }
            None => data,
        };
        let mut warnings = Vec::new();
        let norm = self.normalisation(data, &mut warnings)?;
        let mut measured = Measured::gaussian(data.dsdo_cm_mb_sr.clone(), data.err_mb_sr.clone());
        measured.counts = data.counts.iter().map(|c| c.and_then(|c| self.on_counts(c))).collect();
        let points_poisson = measured.counts.iter().filter(|c| c.is_some()).count();
        let theta_rad: Vec<f64> = data.theta_cm_deg.iter().map(|d| d.to_radians()).collect();
        if let Model::Curve(c) = &self.model {
            if let Some(t) = data.theta_cm_deg.iter().find(|t| c.at(**t).is_none()) {
                return Err(FitFailure::OutsideCurve {
                    theta_deg: *t,
                    first_deg: c.theta_cm_deg[0],
                    last_deg: c.theta_cm_deg[c.theta_cm_deg.len() - 1],
                });
            }
        }
        let mut params = self.params.clone();
        if let Model::Legendre { order } = self.model {
            for (p, a) in params.iter_mut().zip(legendre_start(&data.theta_cm_deg, &measured, order)) {
                p.start = a;
            }
        }
        let mut numerics = None;
        if let Model::Optical(om) = &self.model {
            numerics = Some(fixed_numerics(om, &params.iter().map(|p| p.start).collect::<Vec<_>>())?);
        }
        let shape = AtAngles {
            model: &self.model,
            convention: data.rutherford_convention,
            theta_rad: theta_rad.clone(),
            numerics,
        };
        let starts =
            if self.starts.is_empty() { vec![params.iter().map(|p| p.start).collect()] } else { self.starts.clone() };
        let mut minima = model_fit::fit_starts(&shape, &params, &starts, &measured, norm, &self.options)?;
        // The optical numerics were fixed from the start; re-derive them at the minimum and
        // refit once if they have to be finer.
        let mut shape = shape;
        if let (Model::Optical(om), Some(used)) = (&self.model, shape.numerics) {
            let best: Vec<f64> = minima[0].estimates.iter().take(params.len()).map(|e| e.value).collect();
            let (auto, needed) = (auto_numerics(om, &best)?, fixed_numerics(om, &best)?);
            if auto.step_fm.zip(used.step_fm).is_some_and(|(a, u)| a < u)
                || auto.matching_radius_fm.zip(used.matching_radius_fm).is_some_and(|(a, u)| a > u)
                || auto.l_max.zip(used.l_max).is_some_and(|(a, u)| a > u)
            {
                warnings.push("numerics refined at the minimum and the fit repeated".into());
                shape.numerics = Some(needed);
                let again: Vec<Parameter> =
                    params.iter().zip(&best).map(|(p, v)| Parameter { start: *v, ..p.clone() }).collect();
                let original: Vec<f64> = minima[0].estimates.iter().map(|e| e.start).collect();
                minima[0] = model_fit::fit(&shape, &again, &measured, norm, &self.options)?;
                for (e, s) in minima[0].estimates.iter_mut().zip(original) {
                    e.start = s;
                }
            }
        }
        let best = &minima[0];
        let profiles = self
            .profile
            .iter()
            .map(|name| {
                let j = params.iter().position(|p| &p.name == name).unwrap_or(0);
                model_fit::profile(&shape, &params, &measured, norm, &self.options, best, j)
            })
            .collect::<Result<Vec<Profile>, _>>()?;
        if !best.converged() {
            warnings.push(format!(
                "the fit did not converge ({:?}); the values are the last state, not a result",
                best.termination
            ));
        }
        for e in best.estimates.iter().filter(|e| e.at_bound) {
            warnings.push(format!("{} is at a bound ({}); its error is not given", e.name, e.value));
        }
        let nu = best.normalisation();
        let n = best.estimates.len();
        let matrix = |v: &Vec<f64>| (0..n).map(|i| v[i * n..(i + 1) * n].to_vec()).collect::<Vec<_>>();
        let report = FitReport {
            model: model_name,
            state: state.to_string(),
            points: data.theta_cm_deg.len(),
            likelihood: self.likelihood,
            points_poisson,
            points_gaussian: data.theta_cm_deg.len() - points_poisson,
            converged: best.converged(),
            termination: format!("{:?}", best.termination),
            iterations: best.iterations,
            evaluations: best.evaluations,
            chi2: best.chi2,
            ndf: best.ndf,
            chi2_per_ndf: (best.ndf > 0).then(|| best.chi2 / best.ndf as f64),
            p_value: best.p_value,
            normalisation: self.mode,
            normalisation_prior_rel_err: match norm {
                Normalisation::Prior(w) => Some(w),
                _ => None,
            },
            parameters: best
                .estimates
                .iter()
                .map(|e| ParameterReport {
                    name: e.name.clone(),
                    value: e.value,
                    error: e.error,
                    start: e.start,
                    min: e.min,
                    max: e.max,
                    at_bound: e.at_bound,
                })
                .collect(),
            correlations: best.correlations().as_ref().map(matrix),
            covariance: best.covariance.as_ref().map(matrix),
            minima: if self.starts.len() > 1 {
                minima.iter().map(|m| minimum_report(m, &self.model)).collect()
            } else {
                Vec::new()
            },
            profiles: profiles
                .into_iter()
                .map(|p| ProfileReport { name: p.name, lower: p.lower, upper: p.upper })
                .collect(),
            numerics: shape.numerics.map(|u| NumericsReport {
                step_fm: u.step_fm.unwrap_or(0.0),
                matching_radius_fm: u.matching_radius_fm.unwrap_or(0.0),
                l_max: u.l_max.unwrap_or(0),
            }),
            data: (0..data.theta_cm_deg.len())
                .map(|i| PointReport {
                    label: data.labels[i].clone(),
                    theta_cm_deg: data.theta_cm_deg[i],
                    dsdo_cm_mb_sr: data.dsdo_cm_mb_sr[i],
                    err_mb_sr: data.err_mb_sr[i],
                    model_mb_sr: nu * best.model[i],
                    statistic: if measured.counts_at(i).is_some() { "poisson" } else { "gaussian" },
                    counts: measured.counts_at(i).map(|c| c.counts),
                    pull: match measured.counts_at(i) {
                        // The deviance residual, signed as measured − model.
                        Some(c) => -deviance_residual(c.counts, c.expected(nu * best.model[i])),
                        None => (data.dsdo_cm_mb_sr[i] - nu * best.model[i]) / data.err_mb_sr[i],
                    },
                })
                .collect(),
            warnings,
        };
        let values: Vec<f64> = best.estimates.iter().take(params.len()).map(|e| e.value).collect();
        Ok((report, values))
    }

    /// The best curve (normalisation applied) at CM angles in degrees, for shape parameters
    /// `values` and normalisation `nu`; with the ratio to the Rutherford cross section of
    /// `convention` where the model knows a charged reaction (the convention of the reduced
    /// table, so that data and curve have the same ratio).
    ///
    /// # Errors
    /// The model fails at these parameters.
    pub fn curve(
        &self,
        values: &[f64],
        nu: f64,
        angles_deg: &[f64],
        convention: Convention,
    ) -> Result<Vec<(f64, f64, Option<f64>)>, ShapeError> {
        let shape = AtAngles {
            model: &self.model,
            convention,
            theta_rad: angles_deg.iter().map(|d| d.to_radians()).collect(),
            numerics: None,
        };
        let mut out = vec![0.0; angles_deg.len()];
        shape.values(values, &mut out)?;
        let ruth = |t: f64| self.coulomb.map(|c| convention.cm_mb_sr(c.z1, c.z2, &c.channel, t));
        Ok(angles_deg.iter().zip(out).map(|(d, v)| (*d, nu * v, ruth(d.to_radians()).map(|r| nu * v / r))).collect())
    }
}
