//! Stage `compute_kinematics`: for each detector and state, the two-body kinematics at the
//! detector's lab angle. Adds `theta_cm_deg` (the ejectile's CM angle), `theta_cm_err_deg`
//! (the lab angle's uncertainty carried through dθ_cm/dθ_lab), `domega_lab_per_domega_cm`,
//! `energy_lab_mev` (the expected lab energy of the detected particle in that state) and
//! `branch` (1, or 2 for the lower-energy solution where the lab angle is double valued).
//!
//! Where the angle is double valued, the yields table chooses: a `branch` column (1 or 2),
//! or else `peak_energy_lab_mev`, the measured peak energy, picks the solution with the
//! closer expected energy (the state's energy gate). The choice is logged and kept in the
//! `branch` column.

use polars::prelude::{Column, DataFrame};
use schemars::JsonSchema;
use serde::Deserialize;
use tracing::warn;

use crate::physics::kinematics::{Mode, Solution};
use crate::table::{f64_values, row_detectors, str_values, with_f64_columns};
use crate::{Problem, RunContext, Setup, Stage, StageError};

/// Kinematics convention.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Deserialize, JsonSchema)]
#[serde(rename_all = "snake_case")]
pub enum KinematicsMode {
    /// Four-vectors and a Lorentz boost (default).
    #[default]
    Relativistic,
    /// Galilean velocities; for comparison only.
    NonRelativistic,
}

/// Settings of `compute_kinematics`. The reaction, what is detected and the states come
/// from the `reaction` section.
#[derive(Debug, Clone, Default, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct ComputeKinematicsConfig {
    /// `relativistic` (default) or `non_relativistic`.
    #[serde(default)]
    pub mode: KinematicsMode,
}

/// The built stage.
#[derive(Debug, Clone)]
pub struct ComputeKinematics {
    mode: Mode,
}

impl ComputeKinematicsConfig {
    /// Build the stage.
    ///
    /// # Errors
    /// None today; the reaction was checked with the set-up.
    pub fn build(&self, _setup: Option<&Setup>) -> Result<ComputeKinematics, Vec<Problem>> {
        Ok(ComputeKinematics {
            mode: if self.mode == KinematicsMode::Relativistic { Mode::Relativistic } else { Mode::NonRelativistic },
        })
    }
}

/// Pick one of two solutions of a double-valued angle by branch number or by the closer
/// expected energy.
fn choose(solutions: &[Solution], branch: Option<u8>, peak_energy_mev: Option<f64>) -> Option<Solution> {
    match (branch, peak_energy_mev) {
        (Some(b), _) => solutions.iter().find(|s| s.branch == b).copied(),
        (None, Some(e)) => solutions
            .iter()
            .min_by(|x, y| (x.energy_lab_mev - e).abs().total_cmp(&(y.energy_lab_mev - e).abs()))
            .copied(),
        (None, None) => None,
    }
}

impl Stage for ComputeKinematics {
    fn name(&self) -> &'static str {
        "compute_kinematics"
    }
    fn needs(&self) -> Vec<&'static str> {
        vec!["detector", "state"]
    }
    fn adds(&self) -> Vec<&'static str> {
        vec!["theta_cm_deg", "theta_cm_err_deg", "domega_lab_per_domega_cm", "energy_lab_mev", "branch"]
    }
    fn run(&self, table: DataFrame, ctx: &RunContext<'_>) -> Result<DataFrame, StageError> {
        let reaction = ctx.setup.resolved.as_ref().ok_or_else(|| StageError::NoSetup {
            stage: "compute_kinematics".into(),
            what: "the resolved reaction".into(),
        })?;
        let detectors = row_detectors(&table, ctx.setup)?;
        let states = str_values(&table, "state")?;
        let optional =
            |name: &str| if table.column(name).is_ok() { f64_values(&table, name).map(Some) } else { Ok(None) };
        // The yields check accepted only 1 and 2.
        let branches: Option<Vec<u8>> =
            optional("branch")?.map(|v| v.iter().map(|b| if *b > 1.5 { 2 } else { 1 }).collect());
        let peaks = optional("peak_energy_lab_mev")?;
        let n = table.height();
        let (mut theta_cm, mut theta_cm_err, mut jacobian, mut energy, mut branch) = (
            Vec::with_capacity(n),
            Vec::with_capacity(n),
            Vec::with_capacity(n),
            Vec::with_capacity(n),
            Vec::<i32>::with_capacity(n),
        );
        for (row, (det, state)) in detectors.iter().zip(&states).enumerate() {
            let bad = |value: String, expected: String| StageError::BadValue {
                row: row + 1,
                column: "state".into(),
                value,
                expected,
            };
            let channel = reaction.channel(state).ok_or_else(|| {
                bad(state.clone(), format!("a state of reaction.states ({})", reaction.state_names()))
            })?;
            let theta = det.theta_lab_deg.to_radians();
            let solutions = channel.at_lab_angle(theta, reaction.detect, self.mode);
            let wanted = branches.as_ref().map(|b| b[row]);
            if let Some(b) = wanted {
                if b == 2 && solutions.len() != 2 {
                    return Err(StageError::BadValue {
                        row: row + 1,
                        column: "branch".into(),
                        value: b.to_string(),
                        expected: format!(
                            "1{}",
                            if solutions.len() == 2 { " or 2" } else { " (this angle is single valued)" }
                        ),
                    });
                }
            }
            let chosen = match solutions.as_slice() {
                [] => {
                    let max = channel.max_lab_angle_rad(reaction.detect, self.mode).to_degrees();
                    return Err(bad(
                        state.clone(),
                        format!(
                            "a state that reaches detector {} at {}°: its maximum lab angle is {max:.4}°",
                            det.id, det.theta_lab_deg
                        ),
                    ));
                }
                [one] => *one,
                two => {
                    let pick = choose(two, wanted, peaks.as_ref().map(|p| p[row])).ok_or_else(|| {
                        bad(
                            state.clone(),
                            format!(
                                "a `branch` (1 or 2) or `peak_energy_lab_mev` column in the yields table: detector {} at {}° sees state {state} at {:.4} MeV (branch 1) and {:.4} MeV (branch 2)",
                                det.id, det.theta_lab_deg, two[0].energy_lab_mev, two[1].energy_lab_mev
                            ),
                        )
                    })?;
                    warn!(detector = %det.id, state = %state, branch = pick.branch, "double-valued lab angle; branch chosen from the yields table");
                    pick
                }
            };
            theta_cm.push(chosen.theta_cm_rad.to_degrees());
            theta_cm_err.push(chosen.dtheta_cm_per_dtheta_lab * det.theta_lab_err_deg);
            jacobian.push(chosen.domega_lab_per_domega_cm);
            energy.push(chosen.energy_lab_mev);
            branch.push(i32::from(chosen.branch));
        }
        let mut table = with_f64_columns(
            table,
            vec![
                ("theta_cm_deg", theta_cm),
                ("theta_cm_err_deg", theta_cm_err),
                ("domega_lab_per_domega_cm", jacobian),
                ("energy_lab_mev", energy),
            ],
        )?;
        // The yields table's `branch`, when given, was the choice; the output column (at
        // the end, like the other added ones) is the branch used.
        if table.column("branch").is_ok() {
            table = table.drop("branch")?;
        }
        table.with_column(Column::new("branch".into(), branch))?;
        Ok(table)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::setup::testing::{record, setup};
    use approx::assert_relative_eq;
    use polars::prelude::Column;

    #[test]
    fn galilean_elastic_kinematics_match_the_closed_forms() {
        // Non-relativistic elastic scattering of a on A, x = m_a/m_A (any mechanics text;
        // common practice):
        //     θ_cm = θ_lab + asin(x sin θ_lab),
        //     dΩ_lab/dΩ_cm = |1 + x cos θ_cm| / (1 + x² + 2x cos θ_cm)^{3/2},
        //     E' = E [(m_a cos θ_lab + √(m_A² − m_a² sin² θ_lab)) / (m_a + m_A)]².
        // Tolerance 1e-12 (tightened from 1e-10): the stage solves the same kinematics in
        // another way, some hundred operations on either side (measured 3.4e-16).
        let setup = setup(
            "[{ id: A, theta_lab_deg: 20.0, aperture: { shape: given, solid_angle_msr: 1.0 } },
              { id: B, theta_lab_deg: 90.0, aperture: { shape: given, solid_angle_msr: 1.0 } },
              { id: C, theta_lab_deg: 160.0, aperture: { shape: given, solid_angle_msr: 1.0 } }]",
        );
        let reaction = setup.resolved.as_ref().expect("resolved");
        let (ma, mt) = (reaction.beam.mass_mev, reaction.target.mass_mev);
        let x = ma / mt;
        let config: ComputeKinematicsConfig = serde_yaml::from_str("{ mode: non_relativistic }").expect("parses");
        let stage = config.build(Some(&setup)).expect("builds");
        let table = DataFrame::new_infer_height(vec![
            Column::new("detector".into(), ["A", "B", "C"]),
            Column::new("state".into(), ["elastic"; 3]),
        ])
        .expect("table");
        let out = stage.run(table, &RunContext { setup: &setup, run: &record("") }).expect("runs");
        let col = |c: &str| f64_values(&out, c).expect("column");
        let (cm, jacobian, energy) = (col("theta_cm_deg"), col("domega_lab_per_domega_cm"), col("energy_lab_mev"));
        for (i, lab_deg) in [20.0f64, 90.0, 160.0].iter().enumerate() {
            let lab = lab_deg.to_radians();
            let theta_cm = lab + (x * lab.sin()).asin();
            let j = (1.0 + x * theta_cm.cos()).abs() / (1.0 + x * x + 2.0 * x * theta_cm.cos()).powf(1.5);
            let e = 24.0 * ((ma * lab.cos() + (mt * mt - ma * ma * lab.sin().powi(2)).sqrt()) / (ma + mt)).powi(2);
            assert_relative_eq!(cm[i], theta_cm.to_degrees(), max_relative = 1e-12);
            assert_relative_eq!(jacobian[i], j, max_relative = 1e-12);
            assert_relative_eq!(energy[i], e, max_relative = 1e-12);
        }
    }
}
