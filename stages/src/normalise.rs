//! Stage `normalise`: the absolute normalisation of a run, beam particles from the
//! integrated charge and target atoms per cm² from the foil. Adds `beam_particles`,
//! `beam_particles_rel_err`, `target_atoms_per_cm2` and `target_atoms_rel_err` (the same for
//! every row of a run).

use polars::prelude::DataFrame;
use schemars::JsonSchema;
use serde::Deserialize;

use crate::physics::normalisation::{beam_particles, target_atoms_per_cm2};
use crate::problem::Checks;
use crate::setup::TargetConfig;
use crate::table::with_f64_columns;
use crate::{Problem, RunContext, RunRecord, Setup, Stage, StageError};

/// How the absolute scale is fixed.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Deserialize, JsonSchema)]
#[serde(rename_all = "snake_case")]
pub enum NormaliseMode {
    /// Beam particles from the integrated charge, target atoms from the areal density.
    #[default]
    Absolute,
}

/// Settings of `normalise`.
#[derive(Debug, Clone, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct NormaliseConfig {
    /// `absolute` (default).
    #[serde(default)]
    pub mode: NormaliseMode,
    /// Relative standard uncertainty of the integrated charge (current integrator
    /// calibration, Faraday-cup suppression); default 0, range [0, 1).
    #[serde(default)]
    pub charge_rel_err: f64,
}

/// The built stage: the target part is the same for every run, so it is computed once.
#[derive(Debug, Clone)]
pub struct Normalise {
    charge_rel_err: f64,
    charge_state: u32,
    target_atoms_per_cm2: f64,
    target_atoms_rel_err: f64,
}

impl NormaliseConfig {
    /// Check the settings and build the stage from the set-up's reaction and target
    /// (`setup` as in [`crate::StageConfig::build`]).
    ///
    /// # Errors
    /// Every problem of the settings, or a target without an areal density.
    pub fn build(&self, setup: Option<&Setup>) -> Result<Normalise, Vec<Problem>> {
        let mut c = Checks::default();
        c.rel_err("charge_rel_err", self.charge_rel_err);
        if !c.problems.is_empty() {
            return Err(c.problems);
        }
        // The target section's own check reports a missing areal density.
        let target = setup.map(|s| &s.target);
        let density = target.and_then(TargetConfig::areal_density_g_cm2).unwrap_or(f64::NAN);
        Ok(Normalise {
            charge_rel_err: self.charge_rel_err,
            charge_state: setup.map_or(1, |s| s.reaction.beam_charge_state),
            target_atoms_per_cm2: target.map_or(f64::NAN, |t| {
                target_atoms_per_cm2(density, t.molar_mass_g_mol, t.isotopic_fraction, t.tilt_deg.to_radians())
            }),
            target_atoms_rel_err: target.map_or(0.0, |t| t.areal_density_rel_err),
        })
    }
}

impl Stage for Normalise {
    fn name(&self) -> &'static str {
        "normalise"
    }
    fn needs(&self) -> Vec<&'static str> {
        Vec::new()
    }
    fn adds(&self) -> Vec<&'static str> {
        vec!["beam_particles", "beam_particles_rel_err", "target_atoms_per_cm2", "target_atoms_rel_err"]
    }
    fn run(&self, table: DataFrame, ctx: &RunContext<'_>) -> Result<DataFrame, StageError> {
        let charge = ctx.run.charge_c().ok_or_else(|| StageError::MissingRunValue {
            key: "charge_c".into(),
            needed_by: "normalise with mode absolute".into(),
        })?;
        let n = table.height();
        with_f64_columns(
            table,
            vec![
                ("beam_particles", vec![beam_particles(charge, self.charge_state); n]),
                ("beam_particles_rel_err", vec![self.charge_rel_err; n]),
                ("target_atoms_per_cm2", vec![self.target_atoms_per_cm2; n]),
                ("target_atoms_rel_err", vec![self.target_atoms_rel_err; n]),
            ],
        )
    }
    fn check_run(&self, run: &RunRecord) -> Vec<Problem> {
        match run.charge_c() {
            Some(_) => Vec::new(),
            None => vec![Problem::new(
                "charge_c",
                "missing",
                "the integrated charge (normalise with mode absolute reads it)",
            )],
        }
    }
}
