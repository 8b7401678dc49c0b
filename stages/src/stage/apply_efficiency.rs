//! Stage `apply_efficiency`: each detector's detection efficiency, constant or interpolated
//! in a table against the detected particle's lab energy. Adds `efficiency` and
//! `efficiency_err`; reads `energy_lab_mev` when any detector has a table.

use polars::prelude::DataFrame;
use schemars::JsonSchema;
use serde::Deserialize;

use crate::physics::interpolate;
use crate::table::{f64_values, row_detectors, with_f64_columns};
use crate::{Problem, RunContext, Setup, Stage, StageError};

/// Settings of `apply_efficiency`. The efficiencies themselves belong to the detectors
/// (`detectors[i].efficiency`, `efficiency_err`, `efficiency_table`).
#[derive(Debug, Clone, Default, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct ApplyEfficiencyConfig {}

/// The built stage.
#[derive(Debug, Clone)]
pub struct ApplyEfficiency {
    uses_energy: bool,
}

impl ApplyEfficiencyConfig {
    /// Build the stage; it needs `energy_lab_mev` when a detector has an efficiency table
    /// (`setup` as in [`crate::StageConfig::build`]).
    ///
    /// # Errors
    /// None today; the detectors were checked with the set-up.
    pub fn build(&self, setup: Option<&Setup>) -> Result<ApplyEfficiency, Vec<Problem>> {
        Ok(ApplyEfficiency {
            uses_energy: setup.is_some_and(|s| s.detectors.iter().any(|d| d.efficiency_table.is_some())),
        })
    }
}

impl Stage for ApplyEfficiency {
    fn name(&self) -> &'static str {
        "apply_efficiency"
    }
    fn needs(&self) -> Vec<&'static str> {
        if self.uses_energy {
            vec!["detector", "energy_lab_mev"]
        } else {
            vec!["detector"]
        }
    }
    fn adds(&self) -> Vec<&'static str> {
        vec!["efficiency", "efficiency_err"]
    }
    fn run(&self, table: DataFrame, ctx: &RunContext<'_>) -> Result<DataFrame, StageError> {
        let detectors = row_detectors(&table, ctx.setup)?;
        let energies =
            if self.uses_energy { f64_values(&table, "energy_lab_mev")? } else { vec![f64::NAN; table.height()] };
        let mut value = Vec::with_capacity(detectors.len());
        let mut err = Vec::with_capacity(detectors.len());
        for (row, (det, energy)) in detectors.iter().zip(energies).enumerate() {
            match &det.efficiency_table {
                None => {
                    value.push(det.efficiency);
                    err.push(det.efficiency_err);
                }
                Some(t) => {
                    let context = || format!("data row {}, detector {} efficiency_table", row + 1, det.id);
                    let at = |ys: &[f64]| {
                        interpolate::linear(&t.energy_lab_mev, ys, energy, "energy_lab_mev").map_err(|source| {
                            StageError::Physics { context: context(), source, origin: crate::Origin::Config }
                        })
                    };
                    value.push(at(&t.efficiency)?);
                    err.push(if t.efficiency_err.is_empty() { 0.0 } else { at(&t.efficiency_err)? });
                }
            }
        }
        with_f64_columns(table, vec![("efficiency", value), ("efficiency_err", err)])
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::setup::testing::{record, setup};
    use approx::assert_relative_eq;
    use polars::prelude::Column;

    #[test]
    fn constant_and_tabulated_efficiencies_by_row() {
        // A: constant 0.98 ± 0.005; B: a table, linear between its points, so at 22.5 MeV
        // ε = 0.977 + 0.5 · (0.981 − 0.977) = 0.979 and u = 0.004 (worked by hand).
        let setup = setup(
            "[{ id: A, theta_lab_deg: 30.0, aperture: { shape: given, solid_angle_msr: 1.0 }, efficiency: 0.98, efficiency_err: 0.005 },
              { id: B, theta_lab_deg: 90.0, aperture: { shape: given, solid_angle_msr: 1.0 },
                efficiency_table: { energy_lab_mev: [18.0, 21.0, 24.0], efficiency: [0.972, 0.977, 0.981], efficiency_err: [0.004, 0.004, 0.004] } }]",
        );
        let run = record("");
        let stage = ApplyEfficiencyConfig {}.build(Some(&setup)).expect("builds");
        assert!(stage.needs().contains(&"energy_lab_mev"));
        // (detector, energy, efficiency, error; None: refused outside the table)
        let cases = [("A", 20.0, Some((0.98, 0.005))), ("B", 22.5, Some((0.979, 0.004))), ("B", 25.0, None)];
        for (det, energy, want) in cases {
            let table = DataFrame::new_infer_height(vec![
                Column::new("detector".into(), [det]),
                Column::new("energy_lab_mev".into(), [energy]),
            ])
            .expect("table");
            let out = stage.run(table, &RunContext { setup: &setup, run: &run });
            match (out, want) {
                (Ok(t), Some((eff, err))) => {
                    // 1e-12 (both): at most one linear interpolation, a few roundings.
                    assert_relative_eq!(f64_values(&t, "efficiency").expect("column")[0], eff, max_relative = 1e-12);
                    assert_relative_eq!(
                        f64_values(&t, "efficiency_err").expect("column")[0],
                        err,
                        max_relative = 1e-12
                    );
                }
                (Err(e), None) => assert!(e.to_string().contains("efficiency_table"), "{e}"),
                (got, want) => panic!("{det} at {energy} MeV: {got:?}, expected {want:?}"),
            }
        }
    }
}
