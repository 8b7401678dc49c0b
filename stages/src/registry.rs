//! The registry of stages: one tagged enum, one variant per stage, selected by the YAML
//! `type:` key. Adding a stage means a new module, one variant here, regenerated schemas
//! and an example in `sample-runs/`; the exhaustive `match` shows every place to wire.

use schemars::JsonSchema;
use serde::Deserialize;

use crate::stage::apply_efficiency::ApplyEfficiencyConfig;
use crate::stage::compute_kinematics::ComputeKinematicsConfig;
use crate::stage::compute_lab_cross_section::ComputeLabCrossSectionConfig;
use crate::stage::compute_solid_angle::ComputeSolidAngleConfig;
use crate::stage::correct_dead_time::CorrectDeadTimeConfig;
use crate::stage::normalise::NormaliseConfig;
use crate::stage::subtract_background::SubtractBackgroundConfig;
use crate::stage::transform_to_cm::TransformToCmConfig;
use crate::{Problem, Setup, Stage};

/// One entry of the config's `stages:` list; `type:` names the stage.
#[derive(Debug, Clone, Deserialize, JsonSchema)]
#[serde(tag = "type", rename_all = "snake_case")]
pub enum StageConfig {
    /// Net counts from gross counts and background.
    SubtractBackground(SubtractBackgroundConfig),
    /// Live fraction of the acquisition.
    CorrectDeadTime(CorrectDeadTimeConfig),
    /// CM angle, Jacobian and expected energy per detector and state.
    ComputeKinematics(ComputeKinematicsConfig),
    /// Detection efficiency per detector.
    ApplyEfficiency(ApplyEfficiencyConfig),
    /// Solid angle per detector from its aperture.
    ComputeSolidAngle(ComputeSolidAngleConfig),
    /// Beam particles and target atoms per cm².
    Normalise(NormaliseConfig),
    /// Absolute lab differential cross section with its uncertainty parts.
    ComputeLabCrossSection(ComputeLabCrossSectionConfig),
    /// Cross section in the CM frame and the ratio to Rutherford.
    TransformToCm(TransformToCmConfig),
}

/// The `type:` names, in the order a reduction usually runs them.
pub const STAGE_TYPES: [&str; 8] = [
    "subtract_background",
    "correct_dead_time",
    "compute_kinematics",
    "apply_efficiency",
    "compute_solid_angle",
    "normalise",
    "compute_lab_cross_section",
    "transform_to_cm",
];

impl StageConfig {
    /// The `type:` name of this entry.
    pub fn type_name(&self) -> &'static str {
        match self {
            StageConfig::SubtractBackground(_) => "subtract_background",
            StageConfig::CorrectDeadTime(_) => "correct_dead_time",
            StageConfig::ComputeKinematics(_) => "compute_kinematics",
            StageConfig::ApplyEfficiency(_) => "apply_efficiency",
            StageConfig::ComputeSolidAngle(_) => "compute_solid_angle",
            StageConfig::Normalise(_) => "normalise",
            StageConfig::ComputeLabCrossSection(_) => "compute_lab_cross_section",
            StageConfig::TransformToCm(_) => "transform_to_cm",
        }
    }

    /// Check the settings against the set-up and build the stage.
    ///
    /// `setup` is `None` when the config's set-up sections did not parse: the settings are
    /// still checked so that every problem is reported at once, but the stage built then
    /// must not run.
    ///
    /// # Errors
    /// Every problem of the settings, keys relative to the stage entry.
    pub fn build(&self, setup: Option<&Setup>) -> Result<Box<dyn Stage>, Vec<Problem>> {
        Ok(match self {
            StageConfig::SubtractBackground(c) => Box::new(c.build()?),
            StageConfig::CorrectDeadTime(c) => Box::new(c.build(setup)?),
            StageConfig::ComputeKinematics(c) => Box::new(c.build(setup)?),
            StageConfig::ApplyEfficiency(c) => Box::new(c.build(setup)?),
            StageConfig::ComputeSolidAngle(c) => Box::new(c.build()?),
            StageConfig::Normalise(c) => Box::new(c.build(setup)?),
            StageConfig::ComputeLabCrossSection(c) => Box::new(c.build()?),
            StageConfig::TransformToCm(c) => Box::new(c.build(setup)?),
        })
    }
}
