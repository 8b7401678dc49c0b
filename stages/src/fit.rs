//! The `fit` stage: a model curve fitted to the CM angular distribution of one state.
//!
//! Models (the fit file, tagged by `model:`):
//! - `rutherford`: point-Coulomb scattering (non-relativistic, the convention of
//!   [`crate::theory`]) with a free normalisation;
//! - `legendre`: Σ_l a_l P_l(cos θ_cm) up to `order`, linear in a_l (started at the exact
//!   linear least-squares solution);
//! - `curve`: a theory curve read from a table (θ_cm, dσ/dΩ), interpolated linearly in
//!   ln σ, with a free scale;
//! - `optical`: the optical model of [`crate::theory`] with any subset of its parameters
//!   free, with bounds, and several starts over (for example) the real depth.
//!
//! The χ², the normalisation nuisance parameter, errors, correlations and the p-value are
//! those of [`crate::physics::model_fit`]. The stage reads nothing from disk: the pipeline
//! gives it the data table and, for `curve`, the curve's points.

use std::collections::BTreeMap;

use polars::prelude::DataFrame;
use schemars::JsonSchema;
use serde::{Deserialize, Serialize};

use crate::physics::coulomb::legendre;
use crate::physics::kinematics::{Channel, Masses};
use crate::physics::least_squares::qr_solve;
use crate::physics::model_fit::{
    self, FitError, FitOptions, Measured, Minimum, Normalisation, Parameter, Profile, Shape,
};
use crate::physics::nuclide::Nuclide;
use crate::physics::optical::{self, ElasticChannel, Numerics, OpticalPotential, WoodsSaxon};
use crate::physics::rutherford::Convention;
use crate::problem::Checks;
use crate::table;
use crate::theory::{NumericsConfig, PotentialConfig, RadiusConvention, TermConfig, TheoryReaction};
use crate::{Problem, StageError};

/// A `fit` entry of a config's `stages:` list (it runs once, after every run is reduced).
#[derive(Debug, Clone, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct FitStageConfig {
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
}

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
        potential: PotentialConfig,
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

/// The optical-model parameter keys that can be free.
pub const OPTICAL_KEYS: [&str; 10] = [
    "real.depth_mev",
    "real.r0_fm",
    "real.a_fm",
    "imag_volume.depth_mev",
    "imag_volume.r0_fm",
    "imag_volume.a_fm",
    "imag_surface.depth_mev",
    "imag_surface.r0_fm",
    "imag_surface.a_fm",
    "coulomb.r0_fm",
];

/// A theory curve: strictly increasing CM angles (deg) and positive dσ/dΩ (mb/sr).
#[derive(Debug, Clone, PartialEq)]
pub struct CurveTable {
    /// Angles.
    pub theta_cm_deg: Vec<f64>,
    /// Cross sections.
    pub dsdo_cm_mb_sr: Vec<f64>,
}

impl CurveTable {
    /// Check the points: at least two, angles strictly increasing and finite, cross sections
    /// positive.
    ///
    /// # Errors
    /// The first bad row (0-based), what was found and what is accepted.
    pub fn new(theta_cm_deg: Vec<f64>, dsdo_cm_mb_sr: Vec<f64>) -> Result<Self, Problem> {
        if theta_cm_deg.len() < 2 {
            return Err(Problem::new("rows", theta_cm_deg.len(), "at least two points"));
        }
        for (i, (t, s)) in theta_cm_deg.iter().zip(&dsdo_cm_mb_sr).enumerate() {
            if !(t.is_finite() && (0.0..=180.0).contains(t)) {
                return Err(Problem::new(format!("row {i}.theta_cm_deg"), t, "an angle in [0, 180] degrees"));
            }
            if !(s.is_finite() && *s > 0.0) {
                return Err(Problem::new(format!("row {i}.dsdo_cm_mb_sr"), s, "a positive cross section"));
            }
            if i > 0 && *t <= theta_cm_deg[i - 1] {
                let what = if (*t - theta_cm_deg[i - 1]).abs() <= 0.0 { "duplicate" } else { "unsorted" };
                return Err(Problem::new(
                    format!("row {i}.theta_cm_deg"),
                    format!("{t} after {} ({what})", theta_cm_deg[i - 1]),
                    "strictly increasing angles",
                ));
            }
        }
        Ok(CurveTable { theta_cm_deg, dsdo_cm_mb_sr })
    }

    /// ln σ interpolated linearly in angle; `None` outside the table.
    pub fn at(&self, theta_deg: f64) -> Option<f64> {
        let t = &self.theta_cm_deg;
        if theta_deg < t[0] || theta_deg > t[t.len() - 1] {
            return None;
        }
        let k = t.partition_point(|x| *x <= theta_deg).clamp(1, t.len() - 1);
        let w = (theta_deg - t[k - 1]) / (t[k] - t[k - 1]);
        let (a, b) = (self.dsdo_cm_mb_sr[k - 1].ln(), self.dsdo_cm_mb_sr[k].ln());
        Some((a + w * (b - a)).exp())
    }
}

/// The measured distribution of one state, sorted by angle.
#[derive(Debug, Clone, PartialEq)]
pub struct FitData {
    /// CM angles, degrees.
    pub theta_cm_deg: Vec<f64>,
    /// dσ/dΩ_cm, mb/sr.
    pub dsdo_cm_mb_sr: Vec<f64>,
    /// Statistical ⊕ point-to-point error, mb/sr.
    pub err_mb_sr: Vec<f64>,
    /// Relative normalisation errors of the rows (all equal for one common normalisation).
    pub norm_rel_err: Vec<f64>,
    /// Row labels `run/detector`.
    pub labels: Vec<String>,
    /// The Rutherford cross section the table's `ratio_rutherford` divides by (its
    /// `rutherford_convention` column; relativistic, the default, when it has none): a
    /// Rutherford model and every curve's ratio use the same one.
    pub rutherford_convention: Convention,
}

/// Columns the fit reads from the reduced table.
pub const FIT_COLUMNS: [&str; 6] =
    ["state", "theta_cm_deg", "dsdo_cm_mb_sr", "stat_err_mb_sr", "sys_err_mb_sr", "norm_rel_err"];

/// The column naming the Rutherford convention of `ratio_rutherford`; read by the fit when
/// present.
pub const RUTHERFORD_CONVENTION: &str = "rutherford_convention";

/// The Rutherford convention named in a reduced table's `rutherford_convention` column, or
/// the default (relativistic) when it has none.
///
/// # Errors
/// A name that is not a convention, or two conventions in one table (row numbers 1-based).
fn table_convention(table: &DataFrame) -> Result<Convention, StageError> {
    if table.column(RUTHERFORD_CONVENTION).is_err() {
        return Ok(Convention::default());
    }
    let names = table::str_values(table, RUTHERFORD_CONVENTION)?;
    let mut found: Option<Convention> = None;
    for (i, name) in names.iter().enumerate() {
        let bad = |expected: String| StageError::BadValue {
            row: i + 1,
            column: RUTHERFORD_CONVENTION.into(),
            value: name.clone(),
            expected,
        };
        let c = Convention::from_name(name).ok_or_else(|| bad(Convention::ALL.map(Convention::name).join(" or ")))?;
        if let Some(first) = found.filter(|f| *f != c) {
            return Err(bad(format!(
                "{} as in the rows before (one `rutherford` setting for every run)",
                first.name()
            )));
        }
        found = Some(c);
    }
    Ok(found.unwrap_or_default())
}

impl FitData {
    /// The rows of `state` from a reduced table (several runs may be stacked).
    ///
    /// # Errors
    /// A missing column, a row with a non-finite value or a non-positive error, no rows of
    /// the state (the states found are named).
    pub fn from_table(table: &DataFrame, state: &str) -> Result<Self, StageError> {
        let states = table::str_values(table, "state")?;
        let col = |name| table::f64_values(table, name);
        let (theta, y, stat, sys, norm) = (
            col("theta_cm_deg")?,
            col("dsdo_cm_mb_sr")?,
            col("stat_err_mb_sr")?,
            col("sys_err_mb_sr")?,
            col("norm_rel_err")?,
        );
        let label_of = |name: &str| table::str_values(table, name).ok();
        let (runs, detectors, members) = (label_of("run"), label_of("detector"), label_of("members"));
        let mut rows = Vec::new();
        for (i, s) in states.iter().enumerate() {
            if s != state {
                continue;
            }
            let err = stat[i].hypot(sys[i]);
            for (name, v, ok) in [
                ("theta_cm_deg", theta[i], theta[i].is_finite() && theta[i] > 0.0 && theta[i] < 180.0),
                ("dsdo_cm_mb_sr", y[i], y[i].is_finite()),
                ("stat_err_mb_sr", stat[i], stat[i].is_finite() && stat[i] >= 0.0),
                ("sys_err_mb_sr", sys[i], sys[i].is_finite() && sys[i] >= 0.0),
                ("norm_rel_err", norm[i], norm[i].is_finite() && norm[i] >= 0.0),
            ] {
                if !ok {
                    return Err(StageError::BadValue {
                        row: i,
                        column: name.into(),
                        value: v.to_string(),
                        expected: "a finite value (angles inside (0, 180) degrees, errors ≥ 0)".into(),
                    });
                }
            }
            if err <= 0.0 {
                return Err(StageError::BadValue {
                    row: i,
                    column: "stat_err_mb_sr".into(),
                    value: "0 (and sys_err_mb_sr 0)".into(),
                    expected: "a point with a non-zero error (a χ² needs one)".into(),
                });
            }
            let label = match (&runs, &detectors, &members) {
                (Some(r), Some(d), _) => format!("{}/{}", r[i], d[i]),
                (_, _, Some(m)) => m[i].clone(),
                _ => format!("row {i}"),
            };
            rows.push((theta[i], y[i], err, norm[i], label));
        }
        if rows.is_empty() {
            let mut known: Vec<&String> = states.iter().collect();
            known.sort();
            known.dedup();
            return Err(StageError::BadValue {
                row: 0,
                column: "state".into(),
                value: format!("no rows of state `{state}`"),
                expected: format!(
                    "a state present in the table ({})",
                    known.iter().map(|s| s.as_str()).collect::<Vec<_>>().join(", ")
                ),
            });
        }
        rows.sort_by(|a, b| a.0.total_cmp(&b.0));
        Ok(FitData {
            theta_cm_deg: rows.iter().map(|r| r.0).collect(),
            dsdo_cm_mb_sr: rows.iter().map(|r| r.1).collect(),
            err_mb_sr: rows.iter().map(|r| r.2).collect(),
            norm_rel_err: rows.iter().map(|r| r.3).collect(),
            labels: rows.into_iter().map(|r| r.4).collect(),
            rutherford_convention: table_convention(table)?,
        })
    }
}

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
    /// (measured − model)/error.
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

/// A built fit: the model, the parameters, the settings.
pub struct Fit {
    range_deg: Option<[f64; 2]>,
    model: Model,
    coulomb: Option<PointCoulomb>,
    params: Vec<Parameter>,
    starts: Vec<Vec<f64>>,
    mode: NormalisationMode,
    prior_rel_err: Option<f64>,
    profile: Vec<String>,
    options: FitOptions,
}

/// The point-Coulomb scattering of a fitted reaction's entrance channel, which a curve's
/// `ratio_rutherford` divides by, in the same convention as the reduced cross sections.
#[derive(Debug, Clone, Copy)]
struct PointCoulomb {
    z1: u32,
    z2: u32,
    channel: Channel,
}

/// The entrance channel of a charged reaction, for its Rutherford cross section; `None` for
/// a neutral beam or target.
fn point_coulomb(reaction: &TheoryReaction) -> Result<Option<PointCoulomb>, Vec<Problem>> {
    let (_, beam, target) = reaction.channel()?;
    if beam.z == 0 || target.z == 0 {
        return Ok(None);
    }
    let (ma, mt) = (beam.nuclear_mass_mev(), target.nuclear_mass_mev());
    let masses = Masses { beam_mev: ma, target_mev: mt, ejectile_mev: ma, recoil_mev: mt };
    let channel = Channel::new(masses, reaction.energy_mev, 0.0)
        .map_err(|e| vec![Problem::new("reaction.energy_mev", reaction.energy_mev, e.to_string())])?;
    Ok(Some(PointCoulomb { z1: beam.z, z2: target.z, channel }))
}

enum Model {
    Rutherford(PointCoulomb),
    Legendre { order: usize },
    Curve(CurveTable),
    Optical(Box<OpticalModel>),
}

#[derive(Clone)]
struct OpticalModel {
    potential: PotentialConfig,
    channel: ElasticChannel,
    a13: f64,
    keys: Vec<usize>,
    numerics: Numerics,
}

impl OpticalModel {
    fn potential(&self, p: &[f64]) -> Result<OpticalPotential, String> {
        let mut terms = [self.potential.real, self.potential.imag_volume, self.potential.imag_surface];
        let mut rc = self.potential.coulomb.r0_fm;
        for (k, v) in self.keys.iter().zip(p) {
            match *k {
                9 => rc = *v,
                k => {
                    let t: &mut TermConfig = &mut terms[k / 3];
                    *[&mut t.depth_mev, &mut t.r0_fm, &mut t.a_fm][k % 3] = *v;
                }
            }
        }
        for (t, k) in terms.iter().zip(["real", "imag_volume", "imag_surface"]) {
            if !(t.r0_fm > 0.0 && t.a_fm > 0.0) {
                return Err(format!("{k}: radius and diffuseness must be > 0 (r0 {}, a {})", t.r0_fm, t.a_fm));
            }
        }
        if rc <= 0.0 {
            return Err(format!("coulomb.r0_fm must be > 0, found {rc}"));
        }
        let ws = |t: &TermConfig| WoodsSaxon {
            depth_mev: t.depth_mev,
            radius_fm: t.r0_fm * self.a13,
            diffuseness_fm: t.a_fm,
        };
        Ok(OpticalPotential {
            real: ws(&terms[0]),
            imag_volume: ws(&terms[1]),
            imag_surface: ws(&terms[2]),
            coulomb_radius_fm: rc * self.a13,
        })
    }
}

/// A model at fixed data angles, as a [`Shape`].
struct AtAngles<'a> {
    model: &'a Model,
    /// The Rutherford convention of the data.
    convention: Convention,
    theta_rad: Vec<f64>,
    /// Optical numerics override (held fixed during one minimisation).
    numerics: Option<Numerics>,
}

impl Shape for AtAngles<'_> {
    fn solved_linear(&self) -> bool {
        // The Legendre start is the exact weighted least-squares solution (legendre_start).
        matches!(self.model, Model::Legendre { .. })
    }
    fn values(&self, p: &[f64], out: &mut [f64]) -> Result<(), String> {
        match self.model {
            Model::Rutherford(c) => {
                for (o, t) in out.iter_mut().zip(&self.theta_rad) {
                    *o = self.convention.cm_mb_sr(c.z1, c.z2, &c.channel, *t);
                }
            }
            Model::Legendre { order } => {
                for (o, t) in out.iter_mut().zip(&self.theta_rad) {
                    *o = legendre(t.cos(), *order).iter().zip(p).map(|(pl, a)| pl * a).sum();
                }
            }
            Model::Curve(c) => {
                for (o, t) in out.iter_mut().zip(&self.theta_rad) {
                    *o = c.at(t.to_degrees()).ok_or_else(|| format!("angle {} outside the curve", t.to_degrees()))?;
                }
            }
            Model::Optical(om) => {
                let pot = om.potential(p)?;
                let num = self.numerics.unwrap_or(om.numerics);
                let sol = optical::solve(&pot, &om.channel, &num).map_err(|e| e.to_string())?;
                for (o, (dsdo, _)) in out.iter_mut().zip(sol.waves.curve(&self.theta_rad)) {
                    *o = dsdo;
                }
            }
        }
        Ok(())
    }
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
                c.require(*order <= 60, "order", order, "an order from 0 to 60");
                let params = (0..=*order)
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
            options: FitOptions { max_iterations: s.max_iterations.unwrap_or(200), ..FitOptions::default() },
        })
    }
}

type OpticalParts = (OpticalModel, Vec<Parameter>, Vec<Vec<f64>>);

fn optical_parts(
    reaction: &TheoryReaction,
    potential: &PotentialConfig,
    numerics: &NumericsConfig,
    free: &BTreeMap<String, BoundsConfig>,
    multi_start: &BTreeMap<String, Vec<f64>>,
    c: &mut Checks,
) -> Result<OpticalParts, Vec<Problem>> {
    let (channel, beam, target): (ElasticChannel, &Nuclide, &Nuclide) = reaction.channel()?;
    let terms = [potential.real, potential.imag_volume, potential.imag_surface];
    let value = |k: usize| {
        if k == 9 {
            potential.coulomb.r0_fm
        } else {
            [terms[k / 3].depth_mev, terms[k / 3].r0_fm, terms[k / 3].a_fm][k % 3]
        }
    };
    for (i, t) in terms.iter().enumerate() {
        let key = ["real", "imag_volume", "imag_surface"][i];
        c.positive(&format!("potential.{key}.r0_fm"), t.r0_fm);
        c.positive(&format!("potential.{key}.a_fm"), t.a_fm);
    }
    c.positive("potential.coulomb.r0_fm", potential.coulomb.r0_fm);
    let mut keys = Vec::new();
    let mut params = Vec::new();
    for (name, b) in free {
        let Some(k) = OPTICAL_KEYS.iter().position(|k| k == name) else {
            c.require(false, &format!("free.{name}"), name, &format!("one of {}", OPTICAL_KEYS.join(", ")));
            continue;
        };
        let start = value(k);
        // Radii and diffusenesses stay positive even without an explicit lower bound.
        let min = match (b.min, k % 3 != 0 || k == 9) {
            (Some(m), _) => Some(m),
            (None, true) => Some(1e-3),
            (None, false) => None,
        };
        let (lo, hi) = (min.unwrap_or(f64::NEG_INFINITY), b.max.unwrap_or(f64::INFINITY));
        c.require(lo < hi, &format!("free.{name}"), format!("min {lo}, max {hi}"), "min < max");
        c.require(
            lo <= start && start <= hi,
            &format!("free.{name}"),
            format!("start {start} (from potential) outside [{lo}, {hi}]"),
            "bounds that contain the start value",
        );
        if (k % 3 != 0 || k == 9) && b.min.is_some_and(|m| m <= 0.0) {
            c.require(false, &format!("free.{name}.min"), lo, "a lower bound > 0 for a radius or diffuseness");
        }
        keys.push(k);
        params.push(Parameter { name: name.clone(), start, min, max: b.max });
    }
    c.require(!free.is_empty(), "free", "no free parameters", "at least one free parameter");
    let mut starts = Vec::new();
    let lengths: Vec<usize> = multi_start.values().map(Vec::len).collect();
    if let Some(&n) = lengths.first() {
        c.require(
            lengths.iter().all(|l| *l == n) && n > 0,
            "multi_start",
            format!("lists of lengths {lengths:?}"),
            "non-empty lists of one length",
        );
        for (name, vals) in multi_start {
            match params.iter().position(|p| &p.name == name) {
                None => c.require(false, &format!("multi_start.{name}"), name, "a key listed under `free`"),
                Some(j) => {
                    for (i, v) in vals.iter().enumerate() {
                        let p = &params[j];
                        let ok = p.min.is_none_or(|a| *v >= a) && p.max.is_none_or(|b| *v <= b) && v.is_finite();
                        c.require(ok, &format!("multi_start.{name}[{i}]"), v, "a start inside the parameter's bounds");
                    }
                }
            }
        }
        if c.problems.is_empty() {
            for i in 0..n {
                let mut s: Vec<f64> = params.iter().map(|p| p.start).collect();
                for (name, vals) in multi_start {
                    if let Some(j) = params.iter().position(|p| &p.name == name) {
                        s[j] = vals[i];
                    }
                }
                starts.push(s);
            }
        }
    }
    if !c.problems.is_empty() {
        return Err(std::mem::take(&mut c.problems));
    }
    let a13 = match potential.radius {
        RadiusConvention::Target => f64::from(target.a).cbrt(),
        RadiusConvention::Sum => f64::from(beam.a).cbrt() + f64::from(target.a).cbrt(),
    };
    let numerics = numerics.to_numerics();
    Ok((OpticalModel { potential: potential.clone(), channel, a13, keys, numerics }, params, starts))
}

/// Why a fit gave no result.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum FitFailure {
    /// The fit could not start.
    #[error("{0}")]
    Setup(#[from] FitError),
    /// Settings that do not suit the data.
    #[error("{0}")]
    Data(String),
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
                            return Err(FitFailure::Data(
                                "normalisation: prior needs a normalisation error: the rows have norm_rel_err 0; \
                                 set fit.normalisation_rel_err or use normalisation: fixed"
                                    .into(),
                            ));
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
                    return Err(FitFailure::Data(format!("no data point of state {state} has θ_cm in [{a}, {b}]°")));
                }
                let pick = |v: &Vec<f64>| keep.iter().map(|&i| v[i]).collect::<Vec<f64>>();
                selected = FitData {
                    theta_cm_deg: pick(&data.theta_cm_deg),
                    dsdo_cm_mb_sr: pick(&data.dsdo_cm_mb_sr),
                    err_mb_sr: pick(&data.err_mb_sr),
                    norm_rel_err: pick(&data.norm_rel_err),
                    labels: keep.iter().map(|&i| data.labels[i].clone()).collect(),
                    rutherford_convention: data.rutherford_convention,
                };
                &selected
            }
            None => data,
        };
        let mut warnings = Vec::new();
        let norm = self.normalisation(data, &mut warnings)?;
        let measured = Measured { y: data.dsdo_cm_mb_sr.clone(), sigma: data.err_mb_sr.clone() };
        let theta_rad: Vec<f64> = data.theta_cm_deg.iter().map(|d| d.to_radians()).collect();
        if let Model::Curve(c) = &self.model {
            if let Some(t) = data.theta_cm_deg.iter().find(|t| c.at(**t).is_none()) {
                return Err(FitFailure::Data(format!(
                    "data angle {t}° lies outside the curve ({}° to {}°)",
                    c.theta_cm_deg[0],
                    c.theta_cm_deg[c.theta_cm_deg.len() - 1]
                )));
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
            minima: if self.starts.len() > 1 { minima.iter().map(minimum_report).collect() } else { Vec::new() },
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
                    pull: (data.dsdo_cm_mb_sr[i] - nu * best.model[i]) / data.err_mb_sr[i],
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
    ) -> Result<Vec<(f64, f64, Option<f64>)>, String> {
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

fn minimum_report(m: &Minimum) -> MinimumReport {
    MinimumReport {
        chi2: m.chi2,
        converged: m.converged(),
        termination: format!("{:?}", m.termination),
        parameters: m.estimates.iter().map(|e| (e.name.clone(), e.value)).collect(),
    }
}

/// Weighted linear least squares for the Legendre coefficients: min Σ ((Σ a_l P_l(x_i) −
/// y_i)/σ_i)², by QR of the weighted design matrix (Golub & Van Loan, Alg. 5.3.2).
fn legendre_start(theta_deg: &[f64], data: &Measured, order: usize) -> Vec<f64> {
    let (m, n) = (theta_deg.len(), order + 1);
    if m < n {
        return vec![0.0; n];
    }
    let mut a = vec![0.0; m * n];
    let mut b = vec![0.0; m];
    for (i, t) in theta_deg.iter().enumerate() {
        let p = legendre(t.to_radians().cos(), order);
        for j in 0..n {
            a[i * n + j] = p[j] / data.sigma[i];
        }
        b[i] = data.y[i] / data.sigma[i];
    }
    qr_solve(&mut a, m, n, &mut b).unwrap_or_else(|| vec![0.0; n])
}

/// Numerics for an optical fit: the automatic choice at `p`, with a margin so that moving
/// parameters do not need a finer grid (a smooth χ² needs a fixed grid): the matching radius
/// 3 fm further out, 10 more partial waves, the step 0.8 of the automatic one. User overrides
/// stay as given.
fn fixed_numerics(om: &OpticalModel, p: &[f64]) -> Result<Numerics, FitFailure> {
    let auto = auto_numerics(om, p)?;
    Ok(Numerics {
        accuracy: auto.accuracy,
        step_fm: Some(om.numerics.step_fm.unwrap_or(0.8 * auto.step_fm.unwrap_or(0.0))),
        matching_radius_fm: Some(
            om.numerics.matching_radius_fm.unwrap_or(auto.matching_radius_fm.unwrap_or(0.0) + 3.0),
        ),
        l_max: Some(om.numerics.l_max.unwrap_or(auto.l_max.unwrap_or(0) + 10)),
    })
}

/// The accuracy an optical fit aims at unless the fit file says otherwise: 1e-5 relative,
/// far below the errors of measured cross sections.
pub const FIT_ACCURACY: f64 = 1e-5;

/// The automatic numerics at `p` (accuracy [`FIT_ACCURACY`] unless set).
fn auto_numerics(om: &OpticalModel, p: &[f64]) -> Result<Numerics, FitFailure> {
    let pot = om.potential(p).map_err(FitFailure::Data)?;
    let accuracy = Some(om.numerics.accuracy.unwrap_or(FIT_ACCURACY));
    let sol = optical::solve(&pot, &om.channel, &Numerics { accuracy, ..om.numerics })
        .map_err(|e| FitFailure::Data(e.to_string()))?;
    Ok(Numerics {
        accuracy,
        step_fm: Some(sol.step_fm),
        matching_radius_fm: Some(sol.matching_radii_fm.0),
        l_max: Some(sol.l_max),
    })
}
