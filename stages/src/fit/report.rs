//! What a fit reports (`fit.yaml`, `fit.json`): parameters with errors and bounds, χ² and
//! its p-value, every minimum of a multi-start fit, profile intervals, and the points with
//! the model and pulls.

use std::collections::BTreeMap;

use serde::Serialize;

use super::config::{LikelihoodChoice, NormalisationMode};
use super::models::Model;
use crate::physics::model_fit::Minimum;

/// One fitted parameter in a report.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct ParameterReport {
    /// Name.
    pub name: String,
    /// Best value.
    pub value: f64,
    /// Standard error (curvature matrix), absent at a bound or when singular.
    pub error: Option<f64>,
    /// Start value.
    pub start: f64,
    /// Lower bound.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub min: Option<f64>,
    /// Upper bound.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub max: Option<f64>,
    /// At a bound: the error is not reliable.
    pub at_bound: bool,
}

/// One minimum of a multi-start fit.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct MinimumReport {
    /// χ².
    pub chi2: f64,
    /// Converged.
    pub converged: bool,
    /// Termination reason.
    pub termination: String,
    /// Parameter values by name.
    pub parameters: BTreeMap<String, f64>,
    /// Optical model: the real volume integral per nucleon pair J_R/(A_p A_t), MeV fm³.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub real_volume_integral_mev_fm3: Option<f64>,
}

/// A profile-likelihood interval.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct ProfileReport {
    /// Parameter.
    pub name: String,
    /// Lower end (Δχ² = 1), absent when not found inside the bounds.
    pub lower: Option<f64>,
    /// Upper end.
    pub upper: Option<f64>,
}

/// One data point with the fitted model.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct PointReport {
    /// `run/detector`.
    pub label: String,
    /// CM angle, degrees.
    pub theta_cm_deg: f64,
    /// Measured dσ/dΩ, mb/sr.
    pub dsdo_cm_mb_sr: f64,
    /// Its error (statistical ⊕ point-to-point), mb/sr.
    pub err_mb_sr: f64,
    /// Fitted model (normalisation applied), mb/sr.
    pub model_mb_sr: f64,
    /// How the point entered: `gaussian` (χ² with `err_mb_sr`) or `poisson` (the Baker–Cousins
    /// likelihood ratio on its counts).
    pub statistic: &'static str,
    /// Gross counts the point entered with (Poisson points only).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub counts: Option<f64>,
    /// (measured − model)/error; for a Poisson point its signed deviance residual.
    pub pull: f64,
}

/// The result of a fit, as written to `fit.yaml` / `fit.json`.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct FitReport {
    /// Model name.
    pub model: &'static str,
    /// State fitted.
    pub state: String,
    /// Data points.
    pub points: usize,
    /// The `likelihood` setting.
    pub likelihood: LikelihoodChoice,
    /// Points that entered through the Poisson likelihood ratio on their counts.
    pub points_poisson: usize,
    /// Points that entered through the χ².
    pub points_gaussian: usize,
    /// Whether the best minimum converged. A report with `false` is not a result.
    pub converged: bool,
    /// Why the minimiser stopped.
    pub termination: String,
    /// Iterations of the best minimum.
    pub iterations: usize,
    /// Model evaluations of the best minimum.
    pub evaluations: usize,
    /// χ² (normalisation prior included).
    pub chi2: f64,
    /// Degrees of freedom.
    pub ndf: usize,
    /// χ²/ν.
    pub chi2_per_ndf: Option<f64>,
    /// P(χ²_ν ≥ χ²).
    pub p_value: Option<f64>,
    /// Normalisation treatment.
    pub normalisation: NormalisationMode,
    /// Prior width used (relative), for `prior`.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub normalisation_prior_rel_err: Option<f64>,
    /// Parameters in order.
    pub parameters: Vec<ParameterReport>,
    /// Correlation matrix, rows in parameter order.
    pub correlations: Option<Vec<Vec<f64>>>,
    /// Covariance matrix, rows in parameter order.
    pub covariance: Option<Vec<Vec<f64>>>,
    /// Every distinct minimum of a multi-start fit, best first (non-converged starts last).
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub minima: Vec<MinimumReport>,
    /// Profile-likelihood intervals.
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub profiles: Vec<ProfileReport>,
    /// Optical-model numerics used: step (fm), matching radius (fm), l_max.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub numerics: Option<NumericsReport>,
    /// The points with the model and pulls.
    pub data: Vec<PointReport>,
    /// Warnings.
    pub warnings: Vec<String>,
}

/// Numerics held fixed during an optical-model fit.
#[derive(Debug, Clone, Copy, Serialize, PartialEq)]
pub struct NumericsReport {
    /// Step, fm.
    pub step_fm: f64,
    /// Inner matching radius, fm.
    pub matching_radius_fm: f64,
    /// Highest partial wave.
    pub l_max: usize,
}

pub(super) fn minimum_report(m: &Minimum, model: &Model) -> MinimumReport {
    let values: Vec<f64> = m.estimates.iter().map(|e| e.value).collect();
    MinimumReport {
        chi2: m.chi2,
        converged: m.converged(),
        termination: format!("{:?}", m.termination),
        parameters: m.estimates.iter().map(|e| (e.name.clone(), e.value)).collect(),
        real_volume_integral_mev_fm3: model.real_volume_integral_mev_fm3(&values),
    }
}
