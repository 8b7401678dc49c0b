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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::setup::testing::setup;
    use crate::yields::{ADDED_COLUMNS, OPTIONAL_COLUMNS, REQUIRED_COLUMNS};

    fn entry(yaml: &str) -> Result<StageConfig, serde_yaml::Error> {
        serde_yaml::from_str(yaml)
    }

    fn demo_setup() -> Setup {
        setup("[{ id: A, theta_lab_deg: 30.0, aperture: { shape: given, solid_angle_msr: 1.0 } }]")
    }

    /// One entry per stage with the settings it needs, in the order of [`STAGE_TYPES`] (the
    /// demo config's settings).
    const ENTRIES: [&str; 8] = [
        "{ type: subtract_background }",
        "{ type: correct_dead_time, method: clock_ratio, method_rel_err: 0.002 }",
        "{ type: compute_kinematics, mode: relativistic }",
        "{ type: apply_efficiency }",
        "{ type: compute_solid_angle }",
        "{ type: normalise, mode: absolute, charge_rel_err: 0.01 }",
        "{ type: compute_lab_cross_section }",
        "{ type: transform_to_cm, rutherford: relativistic }",
    ];

    #[test]
    fn every_type_parses_names_itself_and_builds_the_stage_of_that_name() {
        let setup = demo_setup();
        for (yaml, name) in ENTRIES.iter().zip(STAGE_TYPES) {
            let config = entry(yaml).unwrap_or_else(|e| panic!("{yaml}: {e}"));
            assert_eq!(config.type_name(), name, "{yaml}");
            for with_setup in [Some(&setup), None] {
                let stage = config.build(with_setup).unwrap_or_else(|p| panic!("{yaml}: {p:?}"));
                assert_eq!(stage.name(), name, "{yaml}");
            }
        }
    }

    #[test]
    fn in_the_usual_order_each_stage_finds_the_columns_it_needs() {
        // Walking STAGE_TYPES in order, every column a stage needs is in the yields table
        // (required, optional or added on reading) or added by an earlier stage; and every
        // stage adds at least one column that no earlier one did.
        let setup = demo_setup();
        let mut available: Vec<&str> =
            REQUIRED_COLUMNS.iter().chain(&OPTIONAL_COLUMNS).chain(&ADDED_COLUMNS).copied().collect();
        for yaml in ENTRIES {
            let stage = entry(yaml).expect("parses").build(Some(&setup)).expect("builds");
            for need in stage.needs() {
                assert!(available.contains(&need), "{} needs `{need}`; available: {available:?}", stage.name());
            }
            let adds = stage.adds();
            assert!(adds.iter().any(|a| !available.contains(a)), "{} adds nothing new: {adds:?}", stage.name());
            available.extend(adds);
        }
        for column in ["dsdo_lab_mb_sr", "dsdo_cm_mb_sr", "stat_err_mb_sr", "sys_err_mb_sr", "ratio_rutherford"] {
            assert!(available.contains(&column), "`{column}` is never added");
        }
    }

    #[test]
    fn a_bad_entry_is_refused_with_its_key_or_the_accepted_types() {
        let setup = demo_setup();
        // (entry, the key of its problem, or a part of the parser's message)
        let cases = [
            ("{ type: fit }", "unknown variant `fit`, expected one of `subtract_background`, `correct_dead_time`"),
            ("{ method: clock_ratio }", "missing field `type`"),
            ("{ type: correct_dead_time, method: non_paralyzable }", "resolving_time_us"),
            ("{ type: correct_dead_time, method: clock_ratio, method_rel_err: 1.5 }", "method_rel_err"),
            ("{ type: normalise, charge_rel_err: -0.1 }", "charge_rel_err"),
        ];
        for (yaml, want) in cases {
            match entry(yaml) {
                Err(e) => assert!(e.to_string().contains(want), "{yaml}: {e}"),
                Ok(config) => {
                    let problems = config.build(Some(&setup)).err().unwrap_or_else(|| panic!("accepted: {yaml}"));
                    let keys: Vec<&str> = problems.iter().map(|p| p.key.as_str()).collect();
                    assert_eq!(keys, [want], "{yaml}");
                }
            }
        }
    }
}
