//! The config's `fits:` entries and the fit file: which model, its reaction and starting
//! parameters, which are free, and the settings every model shares; `build` checks them all
//! and makes a [`Fit`].

use std::collections::BTreeMap;

use schemars::JsonSchema;
use serde::{Deserialize, Serialize};

use super::data::CurveTable;
use super::models::{optical_parts, point_coulomb, Model};
use super::Fit;
use crate::physics::model_fit::{FitOptions, Parameter};
use crate::problem::Checks;
use crate::theory::{NumericsConfig, PotentialConfig, TheoryReaction};
use crate::{Problem, Setup};

/// Highest Legendre order a fit accepts: 61 coefficients, far more than any angular
/// distribution constrains (common practice keeps the order below the number of points).
const MAX_LEGENDRE_ORDER: usize = 60;

/// One entry of a config's `fits:` list: a fit file and the state it fits. Fits run once,
/// after every run is reduced, on the combined angular distribution.
#[derive(Debug, Clone, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct FitEntryConfig {
    /// The fit file (relative to the config file).
    pub model_file: String,
    /// The state whose angular distribution is fitted.
    pub state: String,
    /// Name of the output folder `fits/<name>/`; default `<state>_<model>`.
    #[serde(default)]
    pub name: Option<String>,
}
/// How the common normalisation enters the fit.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize, Serialize, JsonSchema)]
#[serde(rename_all = "snake_case")]
pub enum NormalisationMode {
    /// Held at 1.
    Fixed,
    /// Fitted freely (a free scale).
    Free,
    /// Fitted with a Gaussian prior of the data's `norm_rel_err` (or `normalisation_rel_err`).
    Prior,
}

/// Settings common to every model.
#[derive(Debug, Clone, Default, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct FitSettings {
    /// Normalisation treatment; default per model (`free` for rutherford and curve,
    /// `fixed` for legendre, `prior` for optical).
    #[serde(default)]
    pub normalisation: Option<NormalisationMode>,
    /// Width of the normalisation prior (relative); default the data's `norm_rel_err`.
    #[serde(default)]
    pub normalisation_rel_err: Option<f64>,
    /// Parameters to give profile-likelihood intervals for.
    #[serde(default)]
    pub profile: Vec<String>,
    /// Iteration limit of the minimiser (default 200).
    #[serde(default)]
    pub max_iterations: Option<usize>,
    /// Fit only the points with θ_cm in [low, high] degrees; default all.
    #[serde(default)]
    pub theta_cm_range_deg: Option<[f64; 2]>,
    /// Which statistic the points enter through: `auto` (default) the Poisson likelihood
    /// ratio (Baker and Cousins 1984) on the counts of rows with fewer gross counts than
    /// `poisson_below_counts`, the χ² elsewhere; `poisson` on the counts of every row that
    /// has them; `gaussian` the χ² everywhere. Rows flagged `upper_limit` always enter
    /// through the likelihood when their counts are known. A table without counts (a
    /// combined distribution) is fitted by the χ².
    #[serde(default)]
    pub likelihood: Option<LikelihoodChoice>,
    /// Gross counts below which `likelihood: auto` uses the Poisson likelihood for a row.
    /// Counts, default 20, accepted > 0.
    #[serde(default)]
    pub poisson_below_counts: Option<f64>,
}

/// The statistic of a fit's points.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Deserialize, Serialize, JsonSchema)]
#[serde(rename_all = "snake_case")]
pub enum LikelihoodChoice {
    /// Poisson likelihood for rows below `poisson_below_counts` gross counts, χ² elsewhere.
    #[default]
    Auto,
    /// χ² for every row (except `upper_limit` rows with counts).
    Gaussian,
    /// Poisson likelihood for every row with counts.
    Poisson,
}

/// Default of `poisson_below_counts`: below about 20 counts the Poisson distribution is
/// visibly skewed and the χ² with √n errors biased (common practice).
pub const POISSON_BELOW_COUNTS: f64 = 20.0;

/// Bounds of a free parameter (either may be omitted).
#[derive(Debug, Clone, Copy, Default, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct BoundsConfig {
    /// Lower bound.
    #[serde(default)]
    pub min: Option<f64>,
    /// Upper bound.
    #[serde(default)]
    pub max: Option<f64>,
}

/// A fit file.
#[derive(Debug, Clone, Deserialize, JsonSchema)]
#[serde(tag = "model", rename_all = "snake_case", deny_unknown_fields)]
pub enum FitModelConfig {
    /// Point-Coulomb scattering times a normalisation.
    Rutherford {
        /// The reaction.
        reaction: TheoryReaction,
        /// Fit settings.
        #[serde(default)]
        fit: FitSettings,
    },
    /// A Legendre series in cos θ_cm.
    Legendre {
        /// Highest order l (≥ 0).
        order: usize,
        /// Fit settings.
        #[serde(default)]
        fit: FitSettings,
    },
    /// A theory curve from a table with columns `theta_cm_deg`, `dsdo_cm_mb_sr`.
    Curve {
        /// The table (CSV or Parquet), relative to the fit file.
        file: String,
        /// Fit settings.
        #[serde(default)]
        fit: FitSettings,
    },
    /// The optical model.
    Optical {
        /// The reaction.
        reaction: TheoryReaction,
        /// Start potential (fixed values of the parameters that are not free).
        potential: Box<PotentialConfig>,
        /// Numerics overrides.
        #[serde(default)]
        numerics: NumericsConfig,
        /// Free parameters by key (`real.depth_mev`, `imag_surface.a_fm`, `coulomb.r0_fm`),
        /// each with optional bounds.
        free: BTreeMap<String, BoundsConfig>,
        /// Several starts: for each key a list of start values (all lists of one length);
        /// every distinct minimum found is reported.
        #[serde(default)]
        multi_start: BTreeMap<String, Vec<f64>>,
        /// Fit settings.
        #[serde(default)]
        fit: FitSettings,
    },
}

fn model_name(c: &FitModelConfig) -> &'static str {
    match c {
        FitModelConfig::Rutherford { .. } => "rutherford",
        FitModelConfig::Legendre { .. } => "legendre",
        FitModelConfig::Curve { .. } => "curve",
        FitModelConfig::Optical { .. } => "optical",
    }
}

impl FitModelConfig {
    /// The model's `model:` name.
    pub fn name(&self) -> &'static str {
        model_name(self)
    }

    /// The settings common to every model.
    pub fn settings(&self) -> &FitSettings {
        match self {
            FitModelConfig::Rutherford { fit, .. }
            | FitModelConfig::Legendre { fit, .. }
            | FitModelConfig::Curve { fit, .. }
            | FitModelConfig::Optical { fit, .. } => fit,
        }
    }

    /// The reaction the model computes (`rutherford` and `optical`); `None` for models
    /// without one.
    pub fn reaction(&self) -> Option<&TheoryReaction> {
        match self {
            FitModelConfig::Rutherford { reaction, .. } | FitModelConfig::Optical { reaction, .. } => Some(reaction),
            FitModelConfig::Legendre { .. } | FitModelConfig::Curve { .. } => None,
        }
    }

    /// Where the model's reaction is not the one of the experiment it fits: another beam or
    /// target, another beam energy (relative difference above 1e-9), or a nuclear mass the
    /// experiment overrides (`atomic_masses_u`; a fit file uses AME2020 masses). Keys as in
    /// the fit file; nothing for models without a reaction or a set-up without one.
    pub fn check_against(&self, setup: &Setup) -> Vec<Problem> {
        self.reaction().map(|r| r.differences(setup, "fits", "fit")).unwrap_or_default()
    }

    /// Check the file and build the fit; `curve` is the table of a `curve` model (read by
    /// the caller from `file`).
    ///
    /// # Errors
    /// Every problem, keys as in the fit file.
    pub fn build(&self, curve: Option<CurveTable>) -> Result<Fit, Vec<Problem>> {
        let mut c = Checks::default();
        let s = self.settings();
        if let Some(w) = s.normalisation_rel_err {
            c.require(w.is_finite() && w > 0.0, "fit.normalisation_rel_err", w, "a relative error > 0");
        }
        let coulomb = match self {
            FitModelConfig::Rutherford { reaction, .. } | FitModelConfig::Optical { reaction, .. } => {
                point_coulomb(reaction)?
            }
            FitModelConfig::Legendre { .. } | FitModelConfig::Curve { .. } => None,
        };
        let (model, params, starts, default_mode) = match self {
            FitModelConfig::Rutherford { .. } => match coulomb {
                Some(pc) => (Model::Rutherford(pc), vec![], vec![], NormalisationMode::Free),
                None => {
                    return Err(vec![Problem::new(
                        "reaction",
                        "a neutral particle",
                        "charged beam and target for Rutherford",
                    )])
                }
            },
            FitModelConfig::Legendre { order, .. } => {
                c.require(*order <= MAX_LEGENDRE_ORDER, "order", order, "an order from 0 to 60");
                // Capped so that a refused order (say 10^9) allocates nothing before the
                // problem is reported.
                let params = (0..=(*order).min(MAX_LEGENDRE_ORDER))
                    .map(|l| Parameter { name: format!("a{l}"), start: 0.0, min: None, max: None })
                    .collect();
                (Model::Legendre { order: *order }, params, vec![], NormalisationMode::Fixed)
            }
            FitModelConfig::Curve { .. } => match curve {
                Some(t) => (Model::Curve(t), vec![], vec![], NormalisationMode::Free),
                None => return Err(vec![Problem::new("file", "no curve", "a curve table")]),
            },
            FitModelConfig::Optical { reaction, potential, numerics, free, multi_start, .. } => {
                let (om, params, starts) = optical_parts(reaction, potential, numerics, free, multi_start, &mut c)?;
                (Model::Optical(Box::new(om)), params, starts, NormalisationMode::Prior)
            }
        };
        let names: Vec<&str> = params.iter().map(|p| p.name.as_str()).collect();
        for (i, p) in s.profile.iter().enumerate() {
            c.require(
                names.contains(&p.as_str()),
                &format!("fit.profile[{i}]"),
                p,
                &format!("a free parameter ({})", if names.is_empty() { "none".into() } else { names.join(", ") }),
            );
        }
        let mode = s.normalisation.unwrap_or(default_mode);
        if matches!(self, FitModelConfig::Legendre { .. }) && mode == NormalisationMode::Free {
            c.require(
                false,
                "fit.normalisation",
                "free",
                "fixed or prior (a Legendre series carries its own scale; a free normalisation would be degenerate with it)",
            );
        }
        if !c.problems.is_empty() {
            return Err(c.problems);
        }
        if let Some(n) = s.poisson_below_counts {
            c.require(n > 0.0 && n.is_finite(), "fit.poisson_below_counts", n, "a count > 0, e.g. 20");
        }
        if let Some([a, b]) = s.theta_cm_range_deg {
            c.require(
                a < b && a.is_finite() && b.is_finite(),
                "fit.theta_cm_range_deg",
                format!("[{a}, {b}]"),
                "[low, high] with low < high",
            );
        }
        if !c.problems.is_empty() {
            return Err(c.problems);
        }
        Ok(Fit {
            range_deg: s.theta_cm_range_deg,
            model,
            coulomb,
            params,
            starts,
            mode,
            prior_rel_err: s.normalisation_rel_err,
            profile: s.profile.clone(),
            likelihood: s.likelihood.unwrap_or_default(),
            poisson_below_counts: s.poisson_below_counts.unwrap_or(POISSON_BELOW_COUNTS),
            options: FitOptions { max_iterations: s.max_iterations.unwrap_or(200), ..FitOptions::default() },
        })
    }
}
