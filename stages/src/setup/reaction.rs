//! The `reaction:` section: beam, target nucleus, energy, ejectile and the states whose
//! peaks are counted, and the resolved reaction (particles with their nuclear masses, one
//! kinematic channel per state) that the kinematic and normalisation stages read. Resolved
//! once, when the set-up is assembled.

use std::collections::{BTreeMap, HashMap};

use schemars::JsonSchema;
use serde::Deserialize;

use crate::physics::kinematics::{Channel, Detect, KinematicsError, Masses};
use crate::physics::nuclide::{self, nuclear_mass_mev, Nuclide};
use crate::problem::Checks;
use crate::Problem;

/// Which outgoing particle the detectors see.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Deserialize, JsonSchema)]
#[serde(rename_all = "snake_case")]
pub enum DetectConfig {
    /// The ejectile (for elastic scattering, the scattered beam particle).
    #[default]
    Ejectile,
    /// The residual (recoil) nucleus.
    Recoil,
}

impl From<DetectConfig> for Detect {
    fn from(d: DetectConfig) -> Self {
        match d {
            DetectConfig::Ejectile => Detect::Ejectile,
            DetectConfig::Recoil => Detect::Recoil,
        }
    }
}

/// A state of the residual nucleus whose peak is counted.
#[derive(Debug, Clone, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct StateConfig {
    /// State name as it appears in the yields tables (`elastic`, `2+_1.454`).
    pub name: String,
    /// Excitation energy of the residual in MeV; default 0 (ground state), >= 0.
    #[serde(default)]
    pub excitation_mev: f64,
}

fn elastic_only() -> Vec<StateConfig> {
    vec![StateConfig { name: "elastic".into(), excitation_mev: 0.0 }]
}

/// The nuclear reaction: beam, target nucleus, beam energy, and what is detected.
#[derive(Debug, Clone, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct ReactionConfig {
    /// Beam particle as physicists write it (`4He`, `alpha`, `p`, `16O`).
    pub beam: String,
    /// Target nucleus (`58Ni`, `197Au`).
    pub target: String,
    /// Beam kinetic energy in the lab at the target centre, in MeV; > 0.
    pub energy_mev: f64,
    /// Charge state q of the beam ions at the charge collector (the integrated charge is
    /// q·e per ion); a whole number >= 1; needed by absolute normalisation.
    #[serde(default)]
    pub beam_charge_state: Option<u32>,
    /// Outgoing light particle; default the beam particle (elastic and inelastic
    /// scattering). The residual nucleus follows from charge and mass number.
    #[serde(default)]
    pub ejectile: Option<String>,
    /// Which outgoing particle the detectors see: `ejectile` (default) or `recoil`.
    #[serde(default)]
    pub detect: DetectConfig,
    /// The states whose peaks are counted, each with its excitation energy; default one
    /// state `elastic` at 0 MeV. Names are unique.
    #[serde(default = "elastic_only")]
    pub states: Vec<StateConfig>,
    /// Atomic masses in u that replace the embedded AME2020 values, by nuclide name
    /// (`{ 58Ni: 57.9353424 }`); default none.
    #[serde(default)]
    pub atomic_masses_u: BTreeMap<String, f64>,
}

/// A particle of the reaction with its nuclear mass.
#[derive(Debug, Clone, PartialEq)]
pub struct Particle {
    /// Name as in the table (`4He`).
    pub name: String,
    /// Charge number.
    pub z: u32,
    /// Mass number.
    pub a: u32,
    /// Nuclear mass in MeV (ground state).
    pub mass_mev: f64,
}

/// The reaction with its particles and one kinematic channel per state.
#[derive(Debug, Clone)]
pub struct ResolvedReaction {
    /// Beam particle.
    pub beam: Particle,
    /// Target nucleus.
    pub target: Particle,
    /// Ejectile.
    pub ejectile: Particle,
    /// Residual nucleus.
    pub recoil: Particle,
    /// What the detectors see.
    pub detect: Detect,
    /// One channel per state, in the order of `states`.
    pub channels: Vec<(StateConfig, Channel)>,
}

impl ResolvedReaction {
    /// The channel of a state by name.
    pub fn channel(&self, state: &str) -> Option<&Channel> {
        self.channels.iter().find(|(s, _)| s.name == state).map(|(_, c)| c)
    }

    /// The state names, comma separated, for messages.
    pub fn state_names(&self) -> String {
        self.channels.iter().map(|(s, _)| s.name.as_str()).collect::<Vec<_>>().join(", ")
    }

    /// Whether a state is elastic scattering (ejectile = beam, residual in its ground state).
    pub fn is_elastic(&self, state: &str) -> bool {
        self.ejectile == self.beam && self.channels.iter().any(|(s, _)| s.name == state && s.excitation_mev == 0.0)
    }

    /// Elastic scattering of the beam on each impurity of the foil (`target.contaminants`)
    /// at the beam energy: the impurity's nuclide and the channel, in the order given; an
    /// impurity that is not a nuclide of the table, or whose channel cannot be built, is
    /// left out (the target's checks refuse such a name).
    pub fn impurity_channels<'a>(
        &self,
        energy_mev: f64,
        contaminants: &'a [super::ContaminantConfig],
    ) -> Vec<(&'a super::ContaminantConfig, &'static Nuclide, Channel)> {
        contaminants
            .iter()
            .filter_map(|k| {
                let nuclide = nuclide::parse(&k.nuclide).ok()?;
                let (m_beam, m_c) = (self.beam.mass_mev, nuclide.nuclear_mass_mev());
                let masses = Masses { beam_mev: m_beam, target_mev: m_c, ejectile_mev: m_beam, recoil_mev: m_c };
                Channel::new(masses, energy_mev, 0.0).ok().map(|ch| (k, nuclide, ch))
            })
            .collect()
    }
}

impl ReactionConfig {
    /// Look up the particles (with the mass overrides) and build each state's channel.
    ///
    /// # Errors
    /// Every problem: unknown nuclides (with suggestions), a residual that charge and mass
    /// number do not allow, bad overrides, duplicate states, closed channels.
    pub fn resolve(&self) -> Result<ResolvedReaction, Vec<Problem>> {
        let mut c = Checks::default();
        c.positive("energy_mev", self.energy_mev);
        if let Some(q) = self.beam_charge_state {
            c.require(q >= 1, "beam_charge_state", q, "a whole number >= 1");
        }
        let mut overrides = HashMap::new();
        for (name, mass) in &self.atomic_masses_u {
            let key = format!("atomic_masses_u.{name}");
            match nuclide::parse(name) {
                Ok(n) => {
                    c.positive(&key, *mass);
                    overrides.insert((n.z, n.a), *mass);
                }
                Err(e) => c.require(false, &key, name, &format!("a nuclide name ({e})")),
            }
        }
        let particle = |n: &Nuclide| Particle {
            name: n.name(),
            z: n.z,
            a: n.a,
            mass_mev: nuclear_mass_mev(n.z, overrides.get(&(n.z, n.a)).copied().unwrap_or(n.atomic_mass_u)),
        };
        let mut lookup = |key: &str, name: &str| match nuclide::parse(name) {
            Ok(n) => Some(particle(n)),
            Err(e) => {
                c.require(false, key, name, &format!("a nuclide in the AME2020 table: {e}"));
                None
            }
        };
        let beam = lookup("beam", &self.beam);
        let target = lookup("target", &self.target);
        let ejectile = lookup("ejectile", self.ejectile.as_deref().unwrap_or(&self.beam));
        let mut names = std::collections::HashSet::new();
        for (i, st) in self.states.iter().enumerate() {
            c.require(
                !st.name.trim().is_empty(),
                &format!("states[{i}].name"),
                "an empty name",
                "a state name such as elastic",
            );
            c.require(
                names.insert(st.name.as_str()),
                &format!("states[{i}].name"),
                &st.name,
                "a name not used by another state",
            );
            c.non_negative(&format!("states[{i}].excitation_mev"), st.excitation_mev);
        }
        c.require(!self.states.is_empty(), "states", "an empty list", "at least one state");
        let (Some(beam), Some(target), Some(ejectile)) = (beam, target, ejectile) else {
            return Err(c.problems);
        };
        let (z, a) = ((beam.z + target.z).checked_sub(ejectile.z), (beam.a + target.a).checked_sub(ejectile.a));
        let recoil = match (z, a) {
            (Some(z), Some(a)) if a > 0 => nuclide::by_za(z, a).map(particle),
            _ => None,
        };
        let Some(recoil) = recoil else {
            c.require(
                false,
                "ejectile",
                &ejectile.name,
                &format!(
                    "an ejectile that leaves a residual nucleus of {} + {} in the mass table",
                    beam.name, target.name
                ),
            );
            return Err(c.problems);
        };
        if !c.problems.is_empty() {
            return Err(c.problems);
        }
        let masses = Masses {
            beam_mev: beam.mass_mev,
            target_mev: target.mass_mev,
            ejectile_mev: ejectile.mass_mev,
            recoil_mev: recoil.mass_mev,
        };
        let mut channels = Vec::new();
        for (i, st) in self.states.iter().enumerate() {
            match Channel::new(masses, self.energy_mev, st.excitation_mev) {
                Ok(ch) => channels.push((st.clone(), ch)),
                Err(e @ KinematicsError::BelowThreshold { .. }) => {
                    c.require(false, "energy_mev", self.energy_mev, &format!("an open channel: {e}"))
                }
                Err(e) => c.require(
                    false,
                    &format!("states[{i}].excitation_mev"),
                    st.excitation_mev,
                    &format!("an excitation the beam can reach: {e}"),
                ),
            }
        }
        if !c.problems.is_empty() {
            return Err(c.problems);
        }
        Ok(ResolvedReaction { beam, target, ejectile, recoil, detect: self.detect.into(), channels })
    }

    /// Every problem of the reaction section.
    pub fn validate(&self) -> Vec<Problem> {
        self.resolve().err().unwrap_or_default()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn reaction(yaml: &str) -> ReactionConfig {
        serde_yaml::from_str(yaml).expect("reaction parses")
    }

    #[test]
    fn residual_follows_from_charge_and_mass_number() {
        // 58Ni(d,p)59Ni: Z 1 + 28 - 1 = 28, A 2 + 58 - 1 = 59.
        let r = reaction("{ beam: d, target: 58Ni, ejectile: p, energy_mev: 12.0 }").resolve().expect("valid");
        assert_eq!((r.recoil.z, r.recoil.a), (28, 59));
        assert_eq!(r.recoil.name, "59Ni");
        assert!(!r.is_elastic("elastic"), "a transfer reaction has no elastic state");
    }

    #[test]
    fn atomic_mass_override_replaces_the_table_value() {
        let table = reaction("{ beam: 4He, target: 58Ni, energy_mev: 24.0 }").resolve().expect("valid");
        let over = reaction("{ beam: 4He, target: 58Ni, energy_mev: 24.0, atomic_masses_u: { 58Ni: 57.9 } }")
            .resolve()
            .expect("valid");
        // 57.9353417 u in the table (AME2020); the override lowers the mass by 0.0353417 u.
        let du = (table.target.mass_mev - over.target.mass_mev) / crate::physics::constants::ATOMIC_MASS_UNIT_MEV;
        // 1e-12 u (tightened from 1e-9): the two masses, ~5.4e4 MeV, round at ~1e-11 MeV each,
        // 1e-14 u (measured 3.5e-15).
        assert!((du - 0.035_341_7).abs() < 1e-12, "{du}");
        let bad = reaction("{ beam: 4He, target: 58Ni, energy_mev: 24.0, atomic_masses_u: { 58Nx: 57.9 } }")
            .resolve()
            .expect_err("unknown name");
        assert_eq!(bad[0].key, "atomic_masses_u.58Nx");
    }

    #[test]
    fn duplicate_states_and_closed_channels_are_problems() {
        let p = reaction(
            "{ beam: 4He, target: 58Ni, energy_mev: 24.0, states: [{ name: a }, { name: a, excitation_mev: 40.0 }] }",
        )
        .resolve()
        .expect_err("two problems");
        let keys: Vec<&str> = p.iter().map(|p| p.key.as_str()).collect();
        assert_eq!(keys, ["states[1].name"]);
        let p =
            reaction("{ beam: 4He, target: 58Ni, energy_mev: 24.0, states: [{ name: high, excitation_mev: 40.0 }] }")
                .resolve()
                .expect_err("closed");
        assert_eq!(p[0].key, "states[0].excitation_mev");
        assert!(p[0].expected.contains("above the"), "{}", p[0].expected);
    }
}
