//! Stage `compute_solid_angle`: each detector's solid angle from its aperture geometry, with
//! the uncertainty propagated from the geometric tolerances by the partial derivatives.
//! Adds `solid_angle_msr` and `solid_angle_err_msr`.

use polars::prelude::DataFrame;
use schemars::JsonSchema;
use serde::Deserialize;

use crate::physics::solid_angle;
use crate::physics::uncertainty::propagate;
use crate::setup::{ApertureConfig, DetectorConfig};
use crate::table::{row_detectors, with_f64_columns};
use crate::{Problem, RunContext, Stage, StageError};

/// Settings of `compute_solid_angle` (the geometry belongs to the detectors).
#[derive(Debug, Clone, Default, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct ComputeSolidAngleConfig {}

/// The built stage.
#[derive(Debug, Clone)]
pub struct ComputeSolidAngle;

impl ComputeSolidAngleConfig {
    /// Build the stage.
    ///
    /// # Errors
    /// None today; the geometry was checked with the set-up.
    pub fn build(&self) -> Result<ComputeSolidAngle, Vec<Problem>> {
        Ok(ComputeSolidAngle)
    }
}

/// Solid angle of a detector in msr and its standard uncertainty (GUM Eq. 10 with the
/// analytic derivatives of [`solid_angle::circle`] and [`solid_angle::rectangle`]; the
/// tolerances of distance and sizes taken as independent).
pub fn detector_solid_angle_msr(det: &DetectorConfig) -> (f64, f64) {
    let d = det.distance_mm.unwrap_or(f64::NAN);
    let (omega, errs) = match det.aperture {
        ApertureConfig::Given { solid_angle_msr, solid_angle_err_msr } => {
            return (solid_angle_msr, solid_angle_err_msr)
        }
        ApertureConfig::Circle { radius_mm, radius_err_mm } => {
            (solid_angle::circle(d, radius_mm), [det.distance_err_mm, radius_err_mm, 0.0])
        }
        ApertureConfig::Rectangle { half_width_mm, half_height_mm, half_width_err_mm, half_height_err_mm } => (
            solid_angle::rectangle(d, half_width_mm, half_height_mm),
            [det.distance_err_mm, half_width_err_mm, half_height_err_mm],
        ),
    };
    let err_sr = propagate(&[omega.d_distance, omega.d_size_1, omega.d_size_2], &errs);
    (omega.sr * 1e3, err_sr * 1e3)
}

impl Stage for ComputeSolidAngle {
    fn name(&self) -> &'static str {
        "compute_solid_angle"
    }
    fn needs(&self) -> Vec<&'static str> {
        vec!["detector"]
    }
    fn adds(&self) -> Vec<&'static str> {
        vec!["solid_angle_msr", "solid_angle_err_msr"]
    }
    fn run(&self, table: DataFrame, ctx: &RunContext<'_>) -> Result<DataFrame, StageError> {
        let (omega, err): (Vec<f64>, Vec<f64>) =
            row_detectors(&table, ctx.setup)?.into_iter().map(detector_solid_angle_msr).unzip();
        with_f64_columns(table, vec![("solid_angle_msr", omega), ("solid_angle_err_msr", err)])
    }
}
