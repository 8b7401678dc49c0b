//! Stage `transform_to_cm`: the cross section and its errors in the centre-of-mass frame,
//! and the ratio to Rutherford for elastic states. Adds `dsdo_cm_mb_sr`, `stat_err_mb_sr`,
//! `sys_err_mb_sr` and, unless `rutherford: none`, `dsdo_rutherford_cm_mb_sr` and
//! `ratio_rutherford` (empty for inelastic states and other reactions).

use polars::prelude::{Column, DataFrame};
use schemars::JsonSchema;
use serde::Deserialize;

use crate::physics::rutherford::Convention;
use crate::table::{f64_values, str_values, with_f64_columns};
use crate::{Problem, RunContext, Setup, Stage, StageError};

/// Which Rutherford cross section to divide by.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Deserialize, JsonSchema)]
#[serde(rename_all = "snake_case")]
pub enum RutherfordChoice {
    /// Relativistic Sommerfeld parameter and CM momentum (default).
    #[default]
    Relativistic,
    /// Non-relativistic CM energy.
    NonRelativistic,
    /// No Rutherford columns (needed for neutral beams).
    None,
}

/// Settings of `transform_to_cm`.
#[derive(Debug, Clone, Default, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct TransformToCmConfig {
    /// Rutherford convention for `ratio_rutherford`: `relativistic` (default),
    /// `non_relativistic`, or `none`.
    #[serde(default)]
    pub rutherford: RutherfordChoice,
}

/// The built stage.
#[derive(Debug, Clone)]
pub struct TransformToCm {
    rutherford: Option<Convention>,
}

impl TransformToCmConfig {
    /// Check the settings against the reaction and build the stage.
    ///
    /// # Errors
    /// A Rutherford ratio asked for with a neutral beam or target.
    pub fn build(&self, setup: Option<&Setup>) -> Result<TransformToCm, Vec<Problem>> {
        let rutherford = match self.rutherford {
            RutherfordChoice::Relativistic => Some(Convention::Relativistic),
            RutherfordChoice::NonRelativistic => Some(Convention::NonRelativistic),
            RutherfordChoice::None => None,
        };
        if let (Some(_), Some(r)) = (rutherford, setup.and_then(|s| s.resolved.as_ref())) {
            if r.beam.z == 0 || r.target.z == 0 {
                let neutral = if r.beam.z == 0 { &r.beam.name } else { &r.target.name };
                return Err(vec![Problem::new(
                    "rutherford",
                    format!(
                        "{} with the neutral {neutral}",
                        if self.rutherford == RutherfordChoice::Relativistic {
                            "relativistic"
                        } else {
                            "non_relativistic"
                        }
                    ),
                    "rutherford: none (there is no Coulomb scattering without charge)",
                )]);
            }
        }
        Ok(TransformToCm { rutherford })
    }
}

/// dσ/dΩ_cm = dσ/dΩ_lab · dΩ_lab/dΩ_cm, the same factor for both error parts (the number of
/// particles in corresponding solid angles is the same in both frames; common practice).
pub fn to_cm(lab: f64, domega_lab_per_domega_cm: f64) -> f64 {
    lab * domega_lab_per_domega_cm
}

impl Stage for TransformToCm {
    fn name(&self) -> &'static str {
        "transform_to_cm"
    }
    fn needs(&self) -> Vec<&'static str> {
        vec![
            "state",
            "dsdo_lab_mb_sr",
            "stat_err_lab_mb_sr",
            "sys_err_lab_mb_sr",
            "domega_lab_per_domega_cm",
            "theta_cm_deg",
        ]
    }
    fn adds(&self) -> Vec<&'static str> {
        if self.rutherford.is_some() {
            vec![
                "dsdo_cm_mb_sr",
                "stat_err_mb_sr",
                "sys_err_mb_sr",
                "dsdo_rutherford_cm_mb_sr",
                "ratio_rutherford",
                "rutherford_convention",
            ]
        } else {
            vec!["dsdo_cm_mb_sr", "stat_err_mb_sr", "sys_err_mb_sr"]
        }
    }
    fn run(&self, table: DataFrame, ctx: &RunContext<'_>) -> Result<DataFrame, StageError> {
        let j = f64_values(&table, "domega_lab_per_domega_cm")?;
        let scaled = |name: &str| {
            f64_values(&table, name).map(|v| v.iter().zip(&j).map(|(x, j)| to_cm(*x, *j)).collect::<Vec<_>>())
        };
        let (dsdo, stat, sys) =
            (scaled("dsdo_lab_mb_sr")?, scaled("stat_err_lab_mb_sr")?, scaled("sys_err_lab_mb_sr")?);
        let rutherford = match (self.rutherford, ctx.setup.resolved.as_ref()) {
            (Some(conv), Some(r)) => {
                let theta = f64_values(&table, "theta_cm_deg")?;
                let states = str_values(&table, "state")?;
                let sigma: Vec<Option<f64>> = states
                    .iter()
                    .zip(&theta)
                    .map(|(s, t)| {
                        r.channel(s)
                            .filter(|_| r.is_elastic(s))
                            .map(|ch| conv.cm_mb_sr(r.beam.z, r.target.z, ch, t.to_radians()))
                    })
                    .collect();
                let ratio: Vec<Option<f64>> = sigma.iter().zip(&dsdo).map(|(s, d)| s.map(|s| d / s)).collect();
                Some((sigma, ratio, conv))
            }
            _ => None,
        };
        let mut table =
            with_f64_columns(table, vec![("dsdo_cm_mb_sr", dsdo), ("stat_err_mb_sr", stat), ("sys_err_mb_sr", sys)])?;
        if let Some((sigma, ratio, conv)) = rutherford {
            let rows = table.height();
            table.with_column(Column::new("dsdo_rutherford_cm_mb_sr".into(), sigma))?;
            table.with_column(Column::new("ratio_rutherford".into(), ratio))?;
            table.with_column(Column::new("rutherford_convention".into(), vec![conv.name(); rows]))?;
        }
        Ok(table)
    }
}
