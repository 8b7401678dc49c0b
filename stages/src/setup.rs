//! The experiment as the config describes it (reaction, target, detectors) and one run's
//! record (charge, clocks, scalers). These are plain structs, deserialized exactly as
//! written; `validate` checks each value's range and reports every problem with its key.

use std::borrow::Cow;
use std::collections::HashMap;

use schemars::{json_schema, JsonSchema, Schema, SchemaGenerator};
use serde::{Deserialize, Deserializer};

use std::collections::BTreeMap;

use crate::physics::kinematics::{Channel, Detect, KinematicsError, Masses};
use crate::physics::nuclide::{self, nuclear_mass_mev, Nuclide};
use crate::problem::Checks;
use crate::Problem;

/// An identifier written as a string or a whole number (`D07`, `7`, `"0101"`), kept as text.
#[derive(Debug, Clone, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub struct Id(pub String);

impl<'de> Deserialize<'de> for Id {
    fn deserialize<D: Deserializer<'de>>(deserializer: D) -> Result<Self, D::Error> {
        struct IdVisitor;
        impl serde::de::Visitor<'_> for IdVisitor {
            type Value = Id;
            fn expecting(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
                f.write_str("a string or a whole number")
            }
            fn visit_str<E: serde::de::Error>(self, v: &str) -> Result<Id, E> {
                if v.trim().is_empty() {
                    return Err(E::invalid_value(serde::de::Unexpected::Str(v), &self));
                }
                Ok(Id(v.to_string()))
            }
            fn visit_u64<E: serde::de::Error>(self, v: u64) -> Result<Id, E> {
                Ok(Id(v.to_string()))
            }
            fn visit_i64<E: serde::de::Error>(self, v: i64) -> Result<Id, E> {
                Ok(Id(v.to_string()))
            }
        }
        deserializer.deserialize_any(IdVisitor)
    }
}

impl JsonSchema for Id {
    fn schema_name() -> Cow<'static, str> {
        "Id".into()
    }
    fn json_schema(_: &mut SchemaGenerator) -> Schema {
        json_schema!({
            "description": "An identifier: a non-empty string or a whole number, kept as text.",
            "type": ["string", "integer"]
        })
    }
}

impl std::fmt::Display for Id {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(&self.0)
    }
}

fn one() -> f64 {
    1.0
}

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

/// The target foil: its areal density and what it is made of.
#[derive(Debug, Clone, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct TargetConfig {
    /// Areal density of the target material in µg/cm² (measured along the foil normal);
    /// give this or `areal_density_mg_cm2`, not both; > 0.
    #[serde(default)]
    pub areal_density_ug_cm2: Option<f64>,
    /// Areal density of the target material in mg/cm²; give this or
    /// `areal_density_ug_cm2`, not both; > 0.
    #[serde(default)]
    pub areal_density_mg_cm2: Option<f64>,
    /// Relative standard uncertainty of the areal density; default 0, range [0, 1).
    #[serde(default)]
    pub areal_density_rel_err: f64,
    /// Molar mass of the target material in g/mol (for an enriched foil, the mean of its
    /// isotopes); > 0.
    pub molar_mass_g_mol: f64,
    /// Atom fraction of the scattering isotope in the target material; default 1, range
    /// (0, 1].
    #[serde(default = "one")]
    pub isotopic_fraction: f64,
    /// Angle between the foil normal and the beam, in degrees; the path through the foil is
    /// longer by 1/cos(tilt). Default 0, range [0, 90).
    #[serde(default)]
    pub tilt_deg: f64,
}

impl TargetConfig {
    /// Areal density in g/cm², whichever unit was written; `None` if neither or both were.
    pub fn areal_density_g_cm2(&self) -> Option<f64> {
        match (self.areal_density_ug_cm2, self.areal_density_mg_cm2) {
            (Some(ug), None) => Some(ug * 1e-6),
            (None, Some(mg)) => Some(mg * 1e-3),
            _ => None,
        }
    }

    /// Every range problem of the target section.
    pub fn validate(&self) -> Vec<Problem> {
        let mut c = Checks::default();
        match (self.areal_density_ug_cm2, self.areal_density_mg_cm2) {
            (Some(v), None) => c.positive("areal_density_ug_cm2", v),
            (None, Some(v)) => c.positive("areal_density_mg_cm2", v),
            (None, None) => {
                c.require(false, "areal_density_ug_cm2", "missing", "areal_density_ug_cm2 or areal_density_mg_cm2")
            }
            (Some(_), Some(_)) => c.require(
                false,
                "areal_density_mg_cm2",
                "both areal_density_ug_cm2 and areal_density_mg_cm2",
                "only one of the two",
            ),
        }
        c.rel_err("areal_density_rel_err", self.areal_density_rel_err);
        c.positive("molar_mass_g_mol", self.molar_mass_g_mol);
        c.fraction("isotopic_fraction", self.isotopic_fraction);
        c.require((0.0..90.0).contains(&self.tilt_deg), "tilt_deg", self.tilt_deg, "an angle in [0, 90) degrees");
        c.problems
    }
}

/// The aperture that defines a detector's solid angle.
#[derive(Debug, Clone, Deserialize, JsonSchema)]
#[serde(tag = "shape", rename_all = "snake_case", deny_unknown_fields)]
pub enum ApertureConfig {
    /// A circular hole centred on, and normal to, the line from the target.
    Circle {
        /// Radius of the hole in mm; > 0.
        radius_mm: f64,
        /// Standard uncertainty of the radius in mm; default 0, >= 0.
        #[serde(default)]
        radius_err_mm: f64,
    },
    /// A rectangular slit centred on, and normal to, the line from the target.
    Rectangle {
        /// Half of the width (in the scattering plane) in mm; > 0.
        half_width_mm: f64,
        /// Half of the height (out of the scattering plane) in mm; > 0.
        half_height_mm: f64,
        /// Standard uncertainty of the half-width in mm; default 0, >= 0.
        #[serde(default)]
        half_width_err_mm: f64,
        /// Standard uncertainty of the half-height in mm; default 0, >= 0.
        #[serde(default)]
        half_height_err_mm: f64,
    },
    /// A solid angle measured directly (for example with a calibrated source).
    Given {
        /// Solid angle in msr; > 0.
        solid_angle_msr: f64,
        /// Standard uncertainty of the solid angle in msr; default 0, >= 0.
        #[serde(default)]
        solid_angle_err_msr: f64,
    },
}

/// Detection efficiency tabulated against the detected particle's lab energy; linear
/// interpolation between points, no extrapolation.
#[derive(Debug, Clone, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct EfficiencyTableConfig {
    /// Lab energies in MeV, strictly increasing; at least 2 points.
    pub energy_lab_mev: Vec<f64>,
    /// Efficiency at each energy, each in (0, 1].
    pub efficiency: Vec<f64>,
    /// Standard uncertainty at each energy (absolute); default all 0.
    #[serde(default)]
    pub efficiency_err: Vec<f64>,
}

/// One detector (telescope) of the set-up.
#[derive(Debug, Clone, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct DetectorConfig {
    /// Detector name as it appears in the yields tables (`D07`, or a number).
    pub id: Id,
    /// Lab scattering angle of the detector centre in degrees; in (0, 180). For a detector
    /// on an `arm`, its angle when the arm stands at the arm's `theta_lab_deg`.
    pub theta_lab_deg: f64,
    /// Standard uncertainty of the lab angle in degrees; default 0, >= 0.
    #[serde(default)]
    pub theta_lab_err_deg: f64,
    /// The arm (an `arms[].id`) the detector is mounted on, when it turns with an arm
    /// between runs; default none (the detector stays at `theta_lab_deg`).
    #[serde(default)]
    pub arm: Option<Id>,
    /// Distance from the target centre to the defining aperture in mm; needed for circle
    /// and rectangle apertures; > 0.
    #[serde(default)]
    pub distance_mm: Option<f64>,
    /// Standard uncertainty of the distance in mm; default 0, >= 0.
    #[serde(default)]
    pub distance_err_mm: f64,
    /// The defining aperture: `shape: circle`, `rectangle` or `given`.
    pub aperture: ApertureConfig,
    /// Constant detection efficiency; default 1, range (0, 1]. Not used when
    /// `efficiency_table` is given.
    #[serde(default = "one")]
    pub efficiency: f64,
    /// Standard uncertainty of the constant efficiency (absolute); default 0, >= 0.
    #[serde(default)]
    pub efficiency_err: f64,
    /// Energy-dependent efficiency; replaces `efficiency` and `efficiency_err`.
    #[serde(default)]
    pub efficiency_table: Option<EfficiencyTableConfig>,
}

impl DetectorConfig {
    /// Every range problem of one detector.
    pub fn validate(&self) -> Vec<Problem> {
        let mut c = Checks::default();
        c.require(
            self.theta_lab_deg > 0.0 && self.theta_lab_deg < 180.0,
            "theta_lab_deg",
            self.theta_lab_deg,
            "an angle in (0, 180) degrees",
        );
        c.non_negative("theta_lab_err_deg", self.theta_lab_err_deg);
        c.non_negative("distance_err_mm", self.distance_err_mm);
        match &self.aperture {
            ApertureConfig::Circle { radius_mm, radius_err_mm } => {
                c.positive("aperture.radius_mm", *radius_mm);
                c.non_negative("aperture.radius_err_mm", *radius_err_mm);
            }
            ApertureConfig::Rectangle { half_width_mm, half_height_mm, half_width_err_mm, half_height_err_mm } => {
                c.positive("aperture.half_width_mm", *half_width_mm);
                c.positive("aperture.half_height_mm", *half_height_mm);
                c.non_negative("aperture.half_width_err_mm", *half_width_err_mm);
                c.non_negative("aperture.half_height_err_mm", *half_height_err_mm);
            }
            ApertureConfig::Given { solid_angle_msr, solid_angle_err_msr } => {
                c.positive("aperture.solid_angle_msr", *solid_angle_msr);
                c.non_negative("aperture.solid_angle_err_msr", *solid_angle_err_msr);
            }
        }
        let needs_distance = !matches!(self.aperture, ApertureConfig::Given { .. });
        match self.distance_mm {
            Some(d) => c.positive("distance_mm", d),
            None => c.require(
                !needs_distance,
                "distance_mm",
                "missing",
                "the target-to-aperture distance in mm (needed for circle and rectangle apertures)",
            ),
        }
        match &self.efficiency_table {
            None => {
                c.fraction("efficiency", self.efficiency);
                c.non_negative("efficiency_err", self.efficiency_err);
            }
            Some(table) => c.nested("efficiency_table", table.validate()),
        }
        c.problems
    }
}

impl EfficiencyTableConfig {
    /// Every problem of an efficiency table: lengths, order, ranges.
    pub fn validate(&self) -> Vec<Problem> {
        let mut c = Checks::default();
        let n = self.energy_lab_mev.len();
        c.require(n >= 2, "energy_lab_mev", format!("{n} points"), "at least 2 points");
        c.require(
            self.energy_lab_mev.windows(2).all(|w| w[0] < w[1]),
            "energy_lab_mev",
            format!("{:?}", self.energy_lab_mev),
            "strictly increasing energies",
        );
        c.require(
            self.efficiency.len() == n,
            "efficiency",
            format!("{} values", self.efficiency.len()),
            &format!("{n} values, one per energy"),
        );
        c.require(
            self.efficiency_err.is_empty() || self.efficiency_err.len() == n,
            "efficiency_err",
            format!("{} values", self.efficiency_err.len()),
            &format!("{n} values, one per energy, or none"),
        );
        for (i, e) in self.efficiency.iter().enumerate() {
            c.fraction(&format!("efficiency[{i}]"), *e);
        }
        for (i, e) in self.efficiency_err.iter().enumerate() {
            c.non_negative(&format!("efficiency_err[{i}]"), *e);
        }
        c.problems
    }
}

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

/// How the integrated beam charge of a run was recorded.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Charge {
    /// Charge in coulomb.
    Coulomb(f64),
    /// Counts of a current integrator and its scale in C per count.
    Integrator {
        /// Integrator counts.
        counts: f64,
        /// Coulomb per count.
        scale_c_per_count: f64,
    },
}

/// The record of one run: its yields file, beam charge, clocks and scalers. Any subset of
/// the clocks and scalers may be given; the dead-time stage names what it needs.
#[derive(Debug, Clone, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct RunRecord {
    /// Run identifier (a string or a whole number), unique among the runs of a config.
    pub run: Id,
    /// The run's yields table (CSV or Parquet), relative to this file; or give
    /// `events_file` or `spectra_file` instead (exactly one of the three).
    #[serde(default)]
    pub yields_file: Option<String>,
    /// The run's list-mode events (Parquet, Arrow IPC or CSV), reduced to yields by the
    /// config's `raw:` section.
    #[serde(default)]
    pub events_file: Option<String>,
    /// The run's spectra (detector, channel, counts; Parquet, Arrow IPC or CSV), reduced to
    /// yields by the config's `raw:` section.
    #[serde(default)]
    pub spectra_file: Option<String>,
    /// Integrated beam charge in C; give this or the integrator pair; > 0.
    #[serde(default)]
    pub charge_c: Option<f64>,
    /// Current-integrator counts for the run; with `integrator_scale_c_per_count`; > 0.
    #[serde(default)]
    pub integrator_counts: Option<f64>,
    /// Charge per integrator count in C; with `integrator_counts`; > 0.
    #[serde(default)]
    pub integrator_scale_c_per_count: Option<f64>,
    /// Live time of the acquisition (busy-vetoed clock) in s; <= `real_time_s`.
    #[serde(default)]
    pub live_time_s: Option<f64>,
    /// Real (elapsed) time of the run in s; > 0.
    #[serde(default)]
    pub real_time_s: Option<f64>,
    /// Pulser signals sent into the electronics during the run; > 0.
    #[serde(default)]
    pub pulser_sent: Option<u64>,
    /// Pulser signals recorded by the acquisition; <= `pulser_sent`.
    #[serde(default)]
    pub pulser_recorded: Option<u64>,
    /// Triggers counted by a free-running scaler (raw); > 0.
    #[serde(default)]
    pub triggers_raw: Option<u64>,
    /// Triggers accepted by the acquisition; <= `triggers_raw`.
    #[serde(default)]
    pub triggers_accepted: Option<u64>,
    /// Recorded event rate in 1/s for the dead-time models; default
    /// `triggers_accepted / real_time_s`.
    #[serde(default)]
    pub recorded_rate_per_s: Option<f64>,
    /// The arms' settings in this run, degrees by arm name (`{ left: 35.0 }`); an arm not
    /// named stands at its config angle. Its detectors turn with it (see `arms:`).
    #[serde(default)]
    pub arm_theta_lab_deg: BTreeMap<String, f64>,
}

/// What a run's data file holds.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum RunData {
    /// A yields table.
    Yields,
    /// List-mode events.
    Events,
    /// Spectra.
    Spectra,
}

impl RunRecord {
    /// The data file and its kind (the first given; `validate` insists on exactly one).
    pub fn data_file(&self) -> Option<(RunData, &str)> {
        [
            (RunData::Yields, &self.yields_file),
            (RunData::Events, &self.events_file),
            (RunData::Spectra, &self.spectra_file),
        ]
        .into_iter()
        .find_map(|(k, v)| v.as_deref().map(|v| (k, v)))
    }

    /// The charge as recorded, if exactly one way was given.
    pub fn charge(&self) -> Option<Charge> {
        match (self.charge_c, self.integrator_counts, self.integrator_scale_c_per_count) {
            (Some(q), None, None) => Some(Charge::Coulomb(q)),
            (None, Some(counts), Some(scale_c_per_count)) => Some(Charge::Integrator { counts, scale_c_per_count }),
            _ => None,
        }
    }

    /// Integrated charge in C.
    pub fn charge_c(&self) -> Option<f64> {
        self.charge().map(|c| match c {
            Charge::Coulomb(q) => q,
            Charge::Integrator { counts, scale_c_per_count } => counts * scale_c_per_count,
        })
    }

    /// Recorded event rate in 1/s: given, or accepted triggers over real time.
    pub fn recorded_rate_per_s(&self) -> Option<f64> {
        self.recorded_rate_per_s.or_else(|| match (self.triggers_accepted, self.real_time_s) {
            (Some(n), Some(t)) if t > 0.0 => Some(n as f64 / t),
            _ => None,
        })
    }

    /// Every range and consistency problem of the record.
    pub fn validate(&self) -> Vec<Problem> {
        let mut c = Checks::default();
        let given: Vec<(&str, &String)> = [
            ("yields_file", &self.yields_file),
            ("events_file", &self.events_file),
            ("spectra_file", &self.spectra_file),
        ]
        .into_iter()
        .filter_map(|(k, v)| v.as_ref().map(|v| (k, v)))
        .collect();
        match given.as_slice() {
            [(key, path)] => {
                c.require(!path.trim().is_empty(), key, "an empty path", "the path of the run's data file")
            }
            [] => c.require(false, "yields_file", "missing", "one of yields_file, events_file, spectra_file"),
            more => c.require(
                false,
                more[1].0,
                format!("{} given together", more.iter().map(|m| m.0).collect::<Vec<_>>().join(" and ")),
                "exactly one of yields_file, events_file, spectra_file",
            ),
        }
        match self.charge() {
            Some(Charge::Coulomb(q)) => c.positive("charge_c", q),
            Some(Charge::Integrator { counts, scale_c_per_count }) => {
                c.positive("integrator_counts", counts);
                c.positive("integrator_scale_c_per_count", scale_c_per_count);
            }
            None => c.require(
                false,
                "charge_c",
                "missing or mixed charge keys",
                "charge_c, or integrator_counts with integrator_scale_c_per_count",
            ),
        }
        if let Some(t) = self.real_time_s {
            c.positive("real_time_s", t);
        }
        if let Some(t) = self.live_time_s {
            c.positive("live_time_s", t);
            if let Some(real) = self.real_time_s {
                c.require(t <= real, "live_time_s", t, &format!("at most real_time_s = {real}"));
            }
        }
        check_scaler_pair(&mut c, ("pulser_sent", self.pulser_sent), ("pulser_recorded", self.pulser_recorded));
        check_scaler_pair(&mut c, ("triggers_raw", self.triggers_raw), ("triggers_accepted", self.triggers_accepted));
        if let Some(r) = self.recorded_rate_per_s {
            c.positive("recorded_rate_per_s", r);
        }
        c.problems
    }
}

/// A scaler pair (all, kept): all > 0 and kept <= all.
fn check_scaler_pair(c: &mut Checks, all: (&str, Option<u64>), kept: (&str, Option<u64>)) {
    if let Some(n) = all.1 {
        c.require(n > 0, all.0, n, "a count > 0");
        if let Some(k) = kept.1 {
            c.require(k <= n, kept.0, k, &format!("at most {} = {n}", all.0));
        }
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

#[cfg(test)]
mod tests {
    use super::*;

    fn reaction(yaml: &str) -> ReactionConfig {
        serde_yaml::from_str(yaml).expect("reaction parses")
    }

    fn arm_setup(arms: &str) -> (Setup, Vec<Problem>) {
        let detectors: Vec<DetectorConfig> = serde_yaml::from_str(
            "[{ id: A1, arm: left, theta_lab_deg: 20.0, aperture: { shape: given, solid_angle_msr: 1.0 } },
              { id: A2, arm: left, theta_lab_deg: 40.0, aperture: { shape: given, solid_angle_msr: 1.0 } },
              { id: F1, theta_lab_deg: 150.0, aperture: { shape: given, solid_angle_msr: 1.0 } }]",
        )
        .expect("detectors parse");
        let target = serde_yaml::from_str("{ areal_density_ug_cm2: 100.0, molar_mass_g_mol: 58.0 }").expect("target");
        let (mut setup, mut problems) =
            Setup::new(reaction("{ beam: 4He, target: 58Ni, energy_mev: 24.0 }"), target, detectors);
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
        assert!((du - 0.035_341_7).abs() < 1e-9, "{du}");
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
