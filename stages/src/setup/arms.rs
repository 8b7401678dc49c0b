//! The `arms:` section: rotating arms that carry detectors, and how a run record's
//! `arm_theta_lab_deg` turns them. Attached to the set-up after it is assembled; each run
//! that moves an arm gets its own turned [`Setup`] before its stages run.

use schemars::JsonSchema;
use serde::Deserialize;

use super::{Id, RunRecord, Setup};
use crate::problem::Checks;
use crate::Problem;

/// A rotating arm (or turntable) carrying detectors: between runs it turns, and every
/// detector on it turns by the same angle. A run record gives the arm's setting for that
/// run in `arm_theta_lab_deg`; a detector on the arm then stands at
///     θ_det = θ_det,config + (θ_arm,run − θ_arm,config)
/// (common practice: detectors fixed on a common arm keep their relative angles).
#[derive(Debug, Clone, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct ArmConfig {
    /// Arm name, used by `detectors[].arm` and in run records (`left`, `arm1`).
    pub id: Id,
    /// The arm's angle in degrees (as read on its scale) at which the detectors' own
    /// `theta_lab_deg` are given; runs that do not set the arm use it. Any finite value in
    /// [-180, 180].
    pub theta_lab_deg: f64,
}

impl Setup {
    /// Add the config's `arms`, listing every problem (duplicate or bad arm, a detector on
    /// an arm that is not there), keys relative to the config's top level.
    pub fn attach_arms(&mut self, arms: Vec<ArmConfig>) -> Vec<Problem> {
        let mut c = Checks::default();
        for (i, arm) in arms.iter().enumerate() {
            c.require(
                arm.theta_lab_deg.is_finite() && arm.theta_lab_deg.abs() <= 180.0,
                &format!("arms[{i}].theta_lab_deg"),
                arm.theta_lab_deg,
                "an angle in [-180, 180] degrees",
            );
            if let Some(first) = arms[..i].iter().position(|a| a.id == arm.id) {
                c.require(
                    false,
                    &format!("arms[{i}].id"),
                    &arm.id,
                    &format!("an id not used before (arms[{first}] has it)"),
                );
            }
        }
        let names = arms.iter().map(|a| a.id.0.as_str()).collect::<Vec<_>>().join(", ");
        for (i, d) in self.detectors.iter().enumerate() {
            if let Some(arm) = &d.arm {
                c.require(
                    arms.iter().any(|a| a.id == *arm),
                    &format!("detectors[{i}].arm"),
                    arm,
                    &format!(
                        "one of the arms ({})",
                        if names.is_empty() { "none is defined in `arms:`" } else { &names }
                    ),
                );
            }
        }
        self.arms = arms;
        c.problems
    }

    /// The set-up of one run: its detectors turned with their arms to the run's settings.
    /// `None` when the run sets no arm away from the config's angles.
    ///
    /// # Errors
    /// Every problem, keys relative to the run record: an arm that is not in the config,
    /// a setting that is not finite, or a detector that would leave (0, 180) degrees.
    pub fn for_run(&self, run: &RunRecord) -> Result<Option<Setup>, Vec<Problem>> {
        let mut c = Checks::default();
        let mut turned = self.clone();
        let mut moved = false;
        let names = self.arms.iter().map(|a| a.id.0.as_str()).collect::<Vec<_>>().join(", ");
        for (name, &setting_deg) in &run.arm_theta_lab_deg {
            let key = format!("arm_theta_lab_deg.{name}");
            let Some(arm) = self.arms.iter().find(|a| a.id.0 == *name) else {
                let known =
                    if names.is_empty() { "none: the config has no `arms:`".to_string() } else { names.clone() };
                c.require(false, &key, name, &format!("an arm of the config ({known})"));
                continue;
            };
            if !(setting_deg.is_finite() && setting_deg.abs() <= 180.0) {
                c.require(false, &key, setting_deg, "an angle in [-180, 180] degrees");
                continue;
            }
            let turn_deg = setting_deg - arm.theta_lab_deg;
            let mut outside = Vec::new();
            for d in turned.detectors.iter_mut().filter(|d| d.arm.as_ref() == Some(&arm.id)) {
                d.theta_lab_deg += turn_deg;
                if !(d.theta_lab_deg > 0.0 && d.theta_lab_deg < 180.0) {
                    outside.push(format!("{} would stand at {}", d.id, d.theta_lab_deg));
                }
                moved |= turn_deg != 0.0;
            }
            c.require(
                outside.is_empty(),
                &key,
                setting_deg,
                &format!("a setting that keeps the arm's detectors within (0, 180) degrees ({})", outside.join(", ")),
            );
        }
        match (c.problems.is_empty(), moved) {
            (false, _) => Err(c.problems),
            (true, false) => Ok(None),
            (true, true) => Ok(Some(turned)),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::setup::DetectorConfig;

    fn arm_setup(arms: &str) -> (Setup, Vec<Problem>) {
        let detectors: Vec<DetectorConfig> = serde_yaml::from_str(
            "[{ id: A1, arm: left, theta_lab_deg: 20.0, aperture: { shape: given, solid_angle_msr: 1.0 } },
              { id: A2, arm: left, theta_lab_deg: 40.0, aperture: { shape: given, solid_angle_msr: 1.0 } },
              { id: F1, theta_lab_deg: 150.0, aperture: { shape: given, solid_angle_msr: 1.0 } }]",
        )
        .expect("detectors parse");
        let reaction = serde_yaml::from_str("{ beam: 4He, target: 58Ni, energy_mev: 24.0 }").expect("reaction");
        let target = serde_yaml::from_str("{ areal_density_ug_cm2: 100.0, molar_mass_g_mol: 58.0 }").expect("target");
        let (mut setup, mut problems) = Setup::new(reaction, target, detectors);
        problems.extend(setup.attach_arms(serde_yaml::from_str(arms).expect("arms parse")));
        (setup, problems)
    }

    fn run_with_arms(arms: &str) -> RunRecord {
        serde_yaml::from_str(&format!("{{ run: r1, yields_file: y.csv, charge_c: 1.0e-6, arm_theta_lab_deg: {arms} }}"))
            .expect("record parses")
    }

    #[test]
    fn detectors_on_an_arm_turn_with_it_and_the_others_stay() {
        let (setup, problems) = arm_setup("[{ id: left, theta_lab_deg: 30.0 }]");
        assert_eq!(problems, []);
        // The arm turned from 30 to 35 degrees: its detectors by +5, the fixed one not.
        let turned = setup.for_run(&run_with_arms("{ left: 35.0 }")).expect("valid").expect("moved");
        let angles: Vec<f64> = turned.detectors.iter().map(|d| d.theta_lab_deg).collect();
        assert_eq!(angles.len(), 3);
        for (got, want) in angles.iter().zip([25.0, 45.0, 150.0]) {
            // 1e-12 deg: a sum of two angles in degrees (the ulp of 150 is 3e-14; measured
            // exact).
            assert!((got - want).abs() < 1e-12, "{angles:?}");
        }
        // At its config angle, or not named: the plan's set-up.
        assert!(setup.for_run(&run_with_arms("{ left: 30.0 }")).expect("valid").is_none());
        assert!(setup.for_run(&run_with_arms("{}")).expect("valid").is_none());
    }

    #[test]
    fn bad_arms_and_settings_are_problems_with_their_keys() {
        let (_, problems) = arm_setup("[{ id: right, theta_lab_deg: 30.0 }, { id: right, theta_lab_deg: 200.0 }]");
        let keys: Vec<&str> = problems.iter().map(|p| p.key.as_str()).collect();
        assert_eq!(keys, ["arms[1].theta_lab_deg", "arms[1].id", "detectors[0].arm", "detectors[1].arm"]);
        assert!(problems[2].expected.contains("one of the arms (right, right)"), "{}", problems[2]);
        let (setup, _) = arm_setup("[{ id: left, theta_lab_deg: 30.0 }]");
        let p = setup.for_run(&run_with_arms("{ middle: 10.0, left: -15.0 }")).expect_err("two problems");
        assert_eq!(p.len(), 2, "{p:?}");
        assert_eq!(p[0].key, "arm_theta_lab_deg.left");
        assert!(p[0].expected.ends_with("(0, 180) degrees (A1 would stand at -25, A2 would stand at -5)"), "{}", p[0]);
        assert_eq!(p[1].key, "arm_theta_lab_deg.middle");
        assert!(p[1].expected.contains("an arm of the config (left)"), "{}", p[1]);
    }
}
