//! The experiment as the config describes it (reaction, target, detectors, arms) and one
//! run's record (charge, clocks, scalers). These are plain structs, deserialized exactly as
//! written; `validate` checks each value's range and reports every problem with its key.
//! [`Setup`] assembles the checked experiment once, before any stage is built; every stage
//! reads it, with the run's record, through [`RunContext`].
//!
//! One file per section: `reaction.rs`, `target.rs`, `detector.rs`, `arms.rs` (and a run's
//! turned set-up), `run_record.rs`; `id.rs` holds the identifier type they share.

use std::collections::HashMap;

use crate::problem::Checks;
use crate::Problem;

mod arms;
mod detector;
mod id;
mod reaction;
mod run_record;
mod target;

pub use arms::ArmConfig;
pub use detector::{ApertureConfig, DetectorConfig, EfficiencyTableConfig};
pub use id::Id;
pub use reaction::{DetectConfig, Particle, ReactionConfig, ResolvedReaction, StateConfig};
pub use run_record::{Charge, DetectorClocks, RunData, RunRecord};
pub use target::{ContaminantConfig, TargetConfig};

/// Serde's default of 1 for the target's isotopic fraction and a detector's efficiency.
fn one() -> f64 {
    1.0
}

/// The validated experiment: reaction, target and detectors, with a lookup by detector id.
#[derive(Debug, Clone)]
pub struct Setup {
    /// The reaction.
    pub reaction: ReactionConfig,
    /// The target.
    pub target: TargetConfig,
    /// The detectors, in config order (which is the output row order).
    pub detectors: Vec<DetectorConfig>,
    /// Particles, masses and channels; `None` when the reaction section has problems.
    pub resolved: Option<ResolvedReaction>,
    /// The arms detectors may be mounted on (see [`Setup::attach_arms`]).
    pub arms: Vec<ArmConfig>,
    index: HashMap<String, usize>,
}

impl Setup {
    /// Assemble a set-up and list every problem of it (ranges, duplicate detector ids),
    /// keys relative to the config's top level. The set-up is returned even with problems,
    /// so that the stages can still be built and checked; it must not be run then.
    pub fn new(reaction: ReactionConfig, target: TargetConfig, detectors: Vec<DetectorConfig>) -> (Self, Vec<Problem>) {
        let mut c = Checks::default();
        let resolved = reaction.resolve().map_err(|p| c.nested("reaction", p)).ok();
        c.nested("target", target.validate());
        c.require(!detectors.is_empty(), "detectors", "an empty list", "at least one detector");
        let mut index = HashMap::new();
        for (i, d) in detectors.iter().enumerate() {
            let key = format!("detectors[{i}]");
            c.nested(&key, d.validate());
            if let Some(first) = index.insert(d.id.0.clone(), i) {
                c.require(
                    false,
                    &format!("{key}.id"),
                    &d.id,
                    &format!("an id not used before (detectors[{first}] has it)"),
                );
            }
        }
        (Setup { reaction, target, detectors, resolved, arms: Vec::new(), index }, c.problems)
    }

    /// Position of a detector in config order.
    pub fn detector_index(&self, id: &str) -> Option<usize> {
        self.index.get(id).copied()
    }

    /// A detector by id.
    pub fn detector(&self, id: &str) -> Option<&DetectorConfig> {
        self.detector_index(id).map(|i| &self.detectors[i])
    }

    /// The detector ids, comma separated, for error messages.
    pub fn detector_ids(&self) -> String {
        self.detectors.iter().map(|d| d.id.0.as_str()).collect::<Vec<_>>().join(", ")
    }
}

/// What a stage may read besides its table: the experiment and the current run.
#[derive(Debug, Clone, Copy)]
pub struct RunContext<'a> {
    /// The experiment.
    pub setup: &'a Setup,
    /// The run being reduced (validated).
    pub run: &'a RunRecord,
}

/// Set-ups and run records from YAML for unit tests of the stages.
#[cfg(test)]
pub(crate) mod testing {
    use super::{DetectorConfig, RunRecord, Setup};

    /// 24 MeV ⁴He²⁺ on ⁵⁸Ni (100 ± 3 µg/cm², 58 g/mol) with the detectors of
    /// `detectors_yaml` (a YAML list); panics on a problem, which is a mistake in the test.
    pub fn setup(detectors_yaml: &str) -> Setup {
        let detectors: Vec<DetectorConfig> = serde_yaml::from_str(detectors_yaml).expect("detectors parse");
        let reaction = serde_yaml::from_str("{ beam: 4He, target: 58Ni, energy_mev: 24.0, beam_charge_state: 2 }")
            .expect("reaction");
        let target = serde_yaml::from_str(
            "{ areal_density_ug_cm2: 100.0, areal_density_rel_err: 0.03, molar_mass_g_mol: 58.0 }",
        )
        .expect("target");
        let (setup, problems) = Setup::new(reaction, target, detectors);
        assert!(problems.is_empty(), "{problems:?}");
        setup
    }

    /// A run record with 1 µC of charge and the fields of `extra` (YAML mapping entries).
    pub fn record(extra: &str) -> RunRecord {
        serde_yaml::from_str(&format!("{{ run: r1, yields_file: y.csv, charge_c: 1.0e-6, {extra} }}")).expect("record")
    }
}
