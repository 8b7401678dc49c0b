//! Theory curves: the model file (`model: optical`, `rutherford` or `hard_sphere`), as
//! written, and its evaluation into dσ/dΩ_cm (and, for a spin-½ beam, the analyzing power)
//! at chosen CM angles. All models use the elastic channel of
//! [`crate::physics::optical::ElasticChannel`] with nuclear masses from the AME2020 table,
//! non-relativistic unless `reaction.kinematics: relativistic`. Protons and neutrons are
//! the spin-½ beams: only they may carry `potential.spin_orbit`.

use schemars::JsonSchema;
use serde::{Deserialize, Serialize};

use crate::physics::nuclide::{self, Nuclide};
use crate::physics::optical::{self, ElasticChannel, Kinematics, Numerics, OpticalPotential, SpinOrbit, WoodsSaxon};
use crate::physics::partial_waves::{hard_sphere, PartialWaves};
use crate::problem::Checks;
use crate::{Problem, Setup};

/// Beam, target and beam energy of a theory curve.
#[derive(Debug, Clone, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct TheoryReaction {
    /// Beam particle (`4He`, `alpha`, `p`, `n`, `16O`).
    pub beam: String,
    /// Target nucleus (`58Ni`).
    pub target: String,
    /// Beam kinetic energy in the lab, MeV; > 0.
    pub energy_mev: f64,
    /// How k and the reduced mass follow from the lab energy: `non_relativistic` (default;
    /// μ = m_a m_A/(m_a + m_A), E = T m_A/(m_a + m_A)) or `relativistic` (k from the
    /// relativistic CM momentum, μ the reduced total energy E_a E_A/(E_a + E_A)).
    #[serde(default)]
    pub kinematics: KinematicsConfig,
}

/// `reaction.kinematics` of a model file.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Deserialize, JsonSchema)]
#[serde(rename_all = "snake_case")]
pub enum KinematicsConfig {
    /// Non-relativistic μ and E (default).
    #[default]
    NonRelativistic,
    /// k from the relativistic CM momentum, μ the reduced total energy.
    Relativistic,
}

/// One Woods–Saxon term: depth, reduced radius and diffuseness.
#[derive(Debug, Clone, Copy, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct TermConfig {
    /// Depth in MeV; attractive (real) or absorptive (imaginary) when positive.
    pub depth_mev: f64,
    /// Reduced radius r0 in fm; R = r0·A^(1/3) by the `radius` convention; > 0.
    pub r0_fm: f64,
    /// Diffuseness a in fm; > 0.
    pub a_fm: f64,
}

fn no_surface() -> TermConfig {
    TermConfig { depth_mev: 0.0, r0_fm: 1.3, a_fm: 0.5 }
}

/// The Coulomb term: a uniformly charged sphere.
#[derive(Debug, Clone, Copy, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct CoulombConfig {
    /// Reduced charge radius r0 in fm; > 0.
    pub r0_fm: f64,
}

/// The spin-orbit term of Thomas form, (ħ/m_π c)² (1/r) d/dr of a Woods–Saxon shape times
/// l·σ (the l·σ normalisation: nucleon depths about 6 MeV; twice these with l·s).
#[derive(Debug, Clone, Copy, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct SpinOrbitConfig {
    /// Real part: depth V_so in MeV (positive: attractive for j = l + ½), r0 and a in fm.
    pub real: TermConfig,
    /// Imaginary part: depth W_so in MeV (positive: absorptive for j = l + ½); default none.
    #[serde(default = "no_surface")]
    pub imag: TermConfig,
}

/// How reduced radii become radii.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Deserialize, JsonSchema)]
#[serde(rename_all = "snake_case")]
pub enum RadiusConvention {
    /// R = r0·A_target^(1/3) (default).
    #[default]
    Target,
    /// R = r0·(A_beam^(1/3) + A_target^(1/3)), usual for heavy ions.
    Sum,
}

/// The optical potential of a model file.
#[derive(Debug, Clone, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct PotentialConfig {
    /// Real volume Woods–Saxon.
    pub real: TermConfig,
    /// Imaginary volume Woods–Saxon.
    pub imag_volume: TermConfig,
    /// Imaginary surface term (derivative form, peak equal to the depth); default none.
    #[serde(default = "no_surface")]
    pub imag_surface: TermConfig,
    /// Coulomb radius.
    pub coulomb: CoulombConfig,
    /// Spin-orbit term (spin-½ beams only: `p`, `n`); default none.
    #[serde(default)]
    pub spin_orbit: Option<Box<SpinOrbitConfig>>,
    /// `target` (default) or `sum`.
    #[serde(default)]
    pub radius: RadiusConvention,
}

/// Overrides of the automatic numerics of the optical model.
#[derive(Debug, Clone, Copy, Default, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct NumericsConfig {
    /// Integration step in fm; default chosen from the largest local wave number.
    #[serde(default)]
    pub step_fm: Option<f64>,
    /// Inner matching radius in fm; default the nuclear range R + 25a.
    #[serde(default)]
    pub matching_radius_fm: Option<f64>,
    /// Highest partial wave; default until |1 − S_L| < 1e-6 × accuracy.
    #[serde(default)]
    pub l_max: Option<usize>,
    /// Relative accuracy of dσ/dΩ the automatic numerics aim at (default 1e-6; at most 0.01).
    #[serde(default)]
    pub accuracy: Option<f64>,
}

impl NumericsConfig {
    /// The solver's form.
    pub fn to_numerics(&self) -> Numerics {
        Numerics {
            step_fm: self.step_fm,
            matching_radius_fm: self.matching_radius_fm,
            l_max: self.l_max,
            accuracy: self.accuracy,
        }
    }
}

/// A theory model file.
#[derive(Debug, Clone, Deserialize, JsonSchema)]
#[serde(tag = "model", rename_all = "snake_case", deny_unknown_fields)]
pub enum ModelConfig {
    /// Optical model with Woods–Saxon potentials.
    Optical {
        /// The reaction.
        reaction: TheoryReaction,
        /// The potential.
        potential: PotentialConfig,
        /// Numerics overrides.
        #[serde(default)]
        numerics: NumericsConfig,
    },
    /// Point-Coulomb scattering.
    Rutherford {
        /// The reaction.
        reaction: TheoryReaction,
    },
    /// An impenetrable sphere (with Coulomb scattering outside it for charged particles).
    HardSphere {
        /// The reaction.
        reaction: TheoryReaction,
        /// Sphere radius in fm; > 0.
        radius_fm: f64,
    },
}

/// What the optical-model numerics used: step and the two matching radii, fm.
pub type NumericsUsed = Option<(f64, (f64, f64))>;

/// One point of a curve.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct CurveRow {
    /// CM angle, degrees.
    pub theta_cm_deg: f64,
    /// dσ/dΩ_cm in mb/sr.
    pub dsdo_cm_mb_sr: f64,
    /// Ratio to Rutherford (charged projectiles).
    pub ratio_rutherford: Option<f64>,
    /// Analyzing power A_y, Madison convention (spin-½ beams: `p`, `n`).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub analyzing_power: Option<f64>,
}

/// An evaluated curve, with what the numerics used.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct Curve {
    /// The model's name.
    pub model: &'static str,
    /// The points.
    pub rows: Vec<CurveRow>,
    /// Reaction cross section, mb (absorptive models).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub sigma_reaction_mb: Option<f64>,
    /// Total cross section, mb (neutral projectiles).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub sigma_total_mb: Option<f64>,
    /// Integrated elastic cross section, mb (neutral projectiles).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub sigma_elastic_mb: Option<f64>,
    /// Highest partial wave summed.
    pub l_max: usize,
    /// Integration step, fm (optical model).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub step_fm: Option<f64>,
    /// Matching radii, fm (optical model).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub matching_radii_fm: Option<(f64, f64)>,
    /// k in 1/fm and η.
    pub k_per_fm: f64,
    /// Sommerfeld parameter.
    pub eta: f64,
}

impl TheoryReaction {
    /// The channel and the two nuclides, or the problems.
    ///
    /// # Errors
    /// Unknown nuclides, a non-positive energy.
    pub fn channel(&self) -> Result<(ElasticChannel, &'static Nuclide, &'static Nuclide), Vec<Problem>> {
        let mut c = Checks::default();
        c.positive("reaction.energy_mev", self.energy_mev);
        let beam =
            nuclide::parse(&self.beam).map_err(|e| c.require(false, "reaction.beam", &self.beam, &e.to_string())).ok();
        let target = nuclide::parse(&self.target)
            .map_err(|e| c.require(false, "reaction.target", &self.target, &e.to_string()))
            .ok();
        match (beam, target) {
            (Some(b), Some(t)) if c.problems.is_empty() => {
                let kinematics = match self.kinematics {
                    KinematicsConfig::NonRelativistic => Kinematics::NonRelativistic,
                    KinematicsConfig::Relativistic => Kinematics::Relativistic,
                };
                let ch = ElasticChannel::from_lab(
                    b.nuclear_mass_mev(),
                    t.nuclear_mass_mev(),
                    self.energy_mev,
                    f64::from(b.z * t.z),
                    kinematics,
                );
                Ok((ch, b, t))
            }
            _ => Err(c.problems),
        }
    }
}

impl TheoryReaction {
    /// Where this reaction is not the one of the experiment `setup` describes: another beam
    /// or target, another beam energy (relative difference above 1e-9), or a nuclear mass
    /// the experiment overrides (`atomic_masses_u`; model files use AME2020 masses). Keys as
    /// in the model file; the messages say what the file is for (`it fits`, `it
    /// simulates`, and `verb` the experiment); nothing for a set-up without a reaction or a
    /// reaction with problems of its own (reported where it is built).
    pub fn differences(&self, setup: &Setup, it: &str, verb: &str) -> Vec<Problem> {
        let Some(resolved) = setup.resolved.as_ref() else { return Vec::new() };
        let Ok((_, beam, target)) = self.channel() else { return Vec::new() };
        let mut problems = Vec::new();
        let experiment = &setup.reaction;
        for (key, name, model, measured) in [
            ("reaction.beam", &self.beam, beam, &resolved.beam),
            ("reaction.target", &self.target, target, &resolved.target),
        ] {
            if (model.z, model.a) != (measured.z, measured.a) {
                problems.push(Problem::new(key, name, format!("{} as in the experiment it {it}", measured.name)));
            } else if (model.nuclear_mass_mev() - measured.mass_mev).abs() > 1e-9 * measured.mass_mev {
                problems.push(Problem::new(
                    key,
                    format!("{name} with the AME2020 nuclear mass {} MeV", model.nuclear_mass_mev()),
                    format!(
                        "the experiment's mass {} MeV (its atomic_masses_u); {verb} files take AME2020 masses, so \
                         {verb} this experiment with its masses left at AME2020",
                        measured.mass_mev
                    ),
                ));
            }
        }
        if (self.energy_mev - experiment.energy_mev).abs() > 1e-9 * experiment.energy_mev {
            problems.push(Problem::new(
                "reaction.energy_mev",
                self.energy_mev,
                format!("{} MeV, the beam energy of the experiment it {it}", experiment.energy_mev),
            ));
        }
        problems
    }
}

/// Whether a beam has spin ½: the nucleons (`p`, `n`); every other beam is taken as spin 0.
fn spin_half(beam: &Nuclide) -> bool {
    beam.a == 1
}

impl ModelConfig {
    /// The reaction of the model.
    pub fn reaction(&self) -> &TheoryReaction {
        match self {
            ModelConfig::Optical { reaction, .. }
            | ModelConfig::Rutherford { reaction }
            | ModelConfig::HardSphere { reaction, .. } => reaction,
        }
    }

    /// The model's `model:` name.
    pub fn name(&self) -> &'static str {
        match self {
            ModelConfig::Optical { .. } => "optical",
            ModelConfig::Rutherford { .. } => "rutherford",
            ModelConfig::HardSphere { .. } => "hard_sphere",
        }
    }

    /// The partial waves of the model and what the numerics used.
    ///
    /// # Errors
    /// Every parameter problem, keys as in the model file.
    pub fn waves(&self) -> Result<(PartialWaves, NumericsUsed), Vec<Problem>> {
        match self {
            ModelConfig::Optical { reaction, potential, numerics } => {
                let (ch, beam, target) = reaction.channel()?;
                let mut c = Checks::default();
                let so_terms = potential
                    .spin_orbit
                    .iter()
                    .flat_map(|so| [("spin_orbit.real", so.real), ("spin_orbit.imag", so.imag)]);
                for (key, t) in [
                    ("real", potential.real),
                    ("imag_volume", potential.imag_volume),
                    ("imag_surface", potential.imag_surface),
                ]
                .into_iter()
                .chain(so_terms)
                {
                    c.positive(&format!("potential.{key}.r0_fm"), t.r0_fm);
                    c.positive(&format!("potential.{key}.a_fm"), t.a_fm);
                    c.require(
                        t.depth_mev.is_finite(),
                        &format!("potential.{key}.depth_mev"),
                        t.depth_mev,
                        "a finite depth in MeV",
                    );
                }
                c.positive("potential.coulomb.r0_fm", potential.coulomb.r0_fm);
                c.require(
                    potential.spin_orbit.is_none() || spin_half(beam),
                    "potential.spin_orbit",
                    format!("a spin-orbit term for the beam {}", reaction.beam),
                    "a spin-½ beam (p or n) for spin_orbit; other beams are spin 0 here: remove the key",
                );
                if let Some(h) = numerics.step_fm {
                    c.positive("numerics.step_fm", h);
                }
                if let Some(r) = numerics.matching_radius_fm {
                    c.positive("numerics.matching_radius_fm", r);
                }
                if let Some(a) = numerics.accuracy {
                    c.require(a > 0.0 && a <= 1e-2, "numerics.accuracy", a, "a relative accuracy in (0, 0.01]");
                }
                if !c.problems.is_empty() {
                    return Err(c.problems);
                }
                let a13 = match potential.radius {
                    RadiusConvention::Target => f64::from(target.a).cbrt(),
                    RadiusConvention::Sum => f64::from(beam.a).cbrt() + f64::from(target.a).cbrt(),
                };
                let ws = |t: TermConfig| WoodsSaxon {
                    depth_mev: t.depth_mev,
                    radius_fm: t.r0_fm * a13,
                    diffuseness_fm: t.a_fm,
                };
                let pot = OpticalPotential {
                    real: ws(potential.real),
                    imag_volume: ws(potential.imag_volume),
                    imag_surface: ws(potential.imag_surface),
                    coulomb_radius_fm: potential.coulomb.r0_fm * a13,
                    spin_orbit: potential
                        .spin_orbit
                        .as_ref()
                        .map(|so| SpinOrbit { real: ws(so.real), imag: ws(so.imag) }),
                };
                let num = numerics.to_numerics();
                let sol = optical::solve(&pot, &ch, &num).map_err(|e| {
                    vec![Problem::new("potential", "these parameters", format!("a solvable potential: {e}"))]
                })?;
                Ok((sol.waves, Some((sol.step_fm, sol.matching_radii_fm))))
            }
            ModelConfig::Rutherford { reaction } => {
                let (ch, beam, target) = reaction.channel()?;
                if beam.z == 0 || target.z == 0 {
                    return Err(vec![Problem::new(
                        "model",
                        "rutherford with a neutral particle",
                        "charged beam and target",
                    )]);
                }
                Ok((
                    PartialWaves {
                        k_per_fm: ch.k_per_fm(),
                        eta: ch.eta(),
                        s: vec![num_complex::Complex64::new(1.0, 0.0)],
                        s_minus: None,
                    },
                    None,
                ))
            }
            ModelConfig::HardSphere { reaction, radius_fm } => {
                let (ch, _, _) = reaction.channel()?;
                let mut c = Checks::default();
                c.positive("radius_fm", *radius_fm);
                if !c.problems.is_empty() {
                    return Err(c.problems);
                }
                let w = hard_sphere(ch.k_per_fm(), ch.eta(), *radius_fm).map_err(|e| {
                    vec![Problem::new(
                        "radius_fm",
                        radius_fm,
                        format!("a radius where the Coulomb functions converge: {e}"),
                    )]
                })?;
                Ok((w, None))
            }
        }
    }

    /// Evaluate the model at CM angles in degrees.
    ///
    /// # Errors
    /// As [`ModelConfig::waves`].
    pub fn evaluate(&self, angles_deg: &[f64]) -> Result<Curve, Vec<Problem>> {
        let (waves, used) = self.waves()?;
        // A nucleon beam has an analyzing power (0 without a spin-orbit term).
        let polarised = self.reaction().channel().is_ok_and(|(_, beam, _)| spin_half(beam));
        let thetas: Vec<f64> = angles_deg.iter().map(|d| d.to_radians()).collect();
        let rows = angles_deg
            .iter()
            .zip(waves.amplitudes(&thetas))
            .map(|(d, a)| CurveRow {
                theta_cm_deg: *d,
                dsdo_cm_mb_sr: a.dsdo_mb_sr(),
                ratio_rutherford: a.ratio_rutherford(),
                analyzing_power: polarised.then(|| a.analyzing_power()),
            })
            .collect();
        let absorptive = matches!(self, ModelConfig::Optical { .. });
        Ok(Curve {
            model: self.name(),
            rows,
            sigma_reaction_mb: absorptive.then(|| waves.sigma_reaction_mb()),
            sigma_total_mb: waves.sigma_total_mb(),
            sigma_elastic_mb: waves.sigma_elastic_mb(),
            l_max: waves.s.len().saturating_sub(1),
            step_fm: used.map(|u| u.0),
            matching_radii_fm: used.map(|u| u.1),
            k_per_fm: waves.k_per_fm,
            eta: waves.eta,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    fn model(yaml: &str) -> ModelConfig {
        serde_yaml::from_str(yaml).expect("the case parses")
    }

    /// The demo's optical model (invented parameters): 24 MeV ⁴He on ⁵⁸Ni.
    const OPTICAL: &str = include_str!("../../sample-runs/alpha-ni58/theory-optical.yaml");

    /// The proton demo model (invented parameters): 30 MeV p on ⁵⁸Ni with spin-orbit terms.
    const PROTON: &str = include_str!("../../sample-runs/proton-ni58/theory-optical.yaml");

    /// [`OPTICAL`] without its nuclear terms: the Coulomb field of a uniformly charged
    /// sphere of reduced radius `r0_fm`, nothing else.
    fn coulomb_only(r0_fm: &str) -> String {
        OPTICAL
            .replace("depth_mev: 150.0", "depth_mev: 0.0")
            .replace("depth_mev: 20.0", "depth_mev: 0.0")
            .replace("coulomb:      { r0_fm: 1.30 }", &format!("coulomb:      {{ r0_fm: {r0_fm} }}"))
    }

    #[test]
    fn model_files_are_checked_key_by_key_and_every_problem_is_reported() {
        let ruth = "model: rutherford\nreaction: { beam: 4He, target: 58Ni, energy_mev: 24.0 }\n";
        let sphere = "model: hard_sphere\nreaction: { beam: n, target: 58Ni, energy_mev: 1.0 }\nradius_fm: 5.0\n";
        // (model file, the keys of its problems)
        let cases: Vec<(String, Vec<&str>)> = vec![
            (OPTICAL.replace("a_fm: 0.60", "a_fm: -0.60"), vec!["potential.real.a_fm"]),
            (OPTICAL.replace("20.0,  r0_fm: 1.40", "20.0,  r0_fm: 0.0"), vec!["potential.imag_volume.r0_fm"]),
            (OPTICAL.replace("depth_mev: 150.0", "depth_mev: .nan"), vec!["potential.real.depth_mev"]),
            (OPTICAL.replace("r0_fm: 1.30", "r0_fm: -1.30"), vec!["potential.coulomb.r0_fm"]),
            (
                format!("{OPTICAL}numerics: {{ step_fm: 0.0, matching_radius_fm: -1.0, accuracy: 0.1 }}\n"),
                vec!["numerics.step_fm", "numerics.matching_radius_fm", "numerics.accuracy"],
            ),
            (OPTICAL.replace("energy_mev: 24.0", "energy_mev: 0.0"), vec!["reaction.energy_mev"]),
            (
                OPTICAL.replace("beam: 4He", "beam: 4Xx").replace("target: 58Ni", "target: 580Ni"),
                vec!["reaction.beam", "reaction.target"],
            ),
            (ruth.replace("beam: 4He", "beam: n"), vec!["model"]),
            // A spin-orbit term needs a spin-½ beam; its own terms are checked like the others.
            (PROTON.replace("beam: p,", "beam: 4He,"), vec!["potential.spin_orbit"]),
            (
                PROTON.replace("-0.5, r0_fm: 1.01, a_fm: 0.75", "-0.5, r0_fm: 1.01, a_fm: 0.0"),
                vec!["potential.spin_orbit.imag.a_fm"],
            ),
            (sphere.replace("radius_fm: 5.0", "radius_fm: 0.0"), vec!["radius_fm"]),
            (sphere.replace("energy_mev: 1.0", "energy_mev: -1.0"), vec!["reaction.energy_mev"]),
        ];
        for (yaml, keys) in cases {
            let problems = model(&yaml).evaluate(&[30.0]).err().unwrap_or_else(|| panic!("accepted:\n{yaml}"));
            let found: Vec<&str> = problems.iter().map(|p| p.key.as_str()).collect();
            assert_eq!(found, keys, "{yaml}");
        }
        let problems = model(&OPTICAL.replace("a_fm: 0.60", "a_fm: -0.60")).waves().expect_err("refused");
        assert_eq!((problems[0].found.as_str(), problems[0].expected.as_str()), ("-0.6", "a finite number > 0"));
        for yaml in [OPTICAL, ruth, sphere, PROTON] {
            assert!(model(yaml).evaluate(&[30.0]).is_ok(), "{yaml}");
        }
    }

    #[test]
    fn the_rutherford_model_is_the_rutherford_formula() {
        // dσ/dΩ = (Z_a Z_A α ħc / (4 E_cm))² / sin⁴(θ/2), E_cm = E_lab m_A/(m_a + m_A) with the
        // nuclear masses of `nuclide` (AME2020 atomic masses, CODATA 2018 u and m_e, Lunney
        // et al. electron binding), evaluated independently with mpmath 1.3.0 at 30 digits
        // (formula: e.g. H. Goldstein, Classical Mechanics, 2nd ed., Eq. (3-102), from memory).
        // (model file, θ_cm in degrees, mpmath value in mb/sr)
        let he = "model: rutherford\nreaction: { beam: 4He, target: 58Ni, energy_mev: 24.0 }\n";
        let o = "model: rutherford\nreaction: { beam: 16O, target: 197Au, energy_mev: 80.0 }\n";
        let cases = [
            (he, 10.0, 139_758.762_152_282),
            (he, 30.0, 1_797.124_465_070_01),
            (he, 90.0, 32.256_932_846_220_1),
            (he, 170.0, 8.188_157_253_306_06),
            (o, 10.0, 1_638_578.046_182_45),
            (o, 30.0, 21_070.082_829_672_7),
            (o, 90.0, 378.190_971_249_490),
            (o, 170.0, 96.000_669_348_643_4),
        ];
        for (yaml, theta_deg, want) in cases {
            let curve = model(yaml).evaluate(&[theta_deg]).expect("evaluates");
            let row = &curve.rows[0];
            // 1e-14: round-off of the ~30 double-precision operations from masses to dσ/dΩ
            // (each ≤ 1.1e-16; measured ≤ 2.5e-15); the reference has 15 digits.
            assert_relative_eq!(row.dsdo_cm_mb_sr, want, max_relative = 1e-14);
            // 1e-15: the ratio divides the same amplitude by itself, 1 up to one rounding.
            assert_relative_eq!(row.ratio_rutherford.expect("charged"), 1.0, max_relative = 1e-15);
        }
    }

    #[test]
    fn a_pure_coulomb_optical_model_is_rutherford_where_the_charge_sphere_is_not_reached() {
        // No nuclear potential: only the finite size of the charge sphere (R_c = r0·58^(1/3))
        // can move the ratio to Rutherford away from 1. The sphere changes the partial waves
        // that reach it, S_L ≠ 1, whose amplitude is at most b = Σ_L (2L+1)|S_L − 1|/(2k); the
        // Coulomb amplitude is |f_C| = η/(2k sin²(θ/2)), so by the triangle inequality
        //     |σ/σ_R − 1| ≤ 2b/|f_C| + (b/|f_C|)²,
        // which vanishes as θ → 0. (θ_cm in degrees, the sphere's r0 in fm)
        let realistic = [1.0f64, 2.0, 5.0, 10.0].map(|t| (t, "1.30"));
        // r0 = 0.05 fm: R_c = 0.19 fm, far inside the closest approach of 3.6 fm (head-on,
        // Z_a Z_A e²/E_cm), so the curve is Rutherford at every angle to the solver's accuracy.
        let point_like = [1.0, 10.0, 60.0, 90.0, 150.0, 179.0].map(|t| (t, "0.05"));
        for (theta_deg, r0_fm) in realistic.into_iter().chain(point_like) {
            let m = model(&coulomb_only(r0_fm));
            let (waves, _) = m.waves().expect("solves");
            let b: f64 = waves.s.iter().enumerate().map(|(l, s)| (2 * l + 1) as f64 * (s - 1.0).norm()).sum::<f64>()
                / (2.0 * waves.k_per_fm);
            let f_c = waves.eta / (2.0 * waves.k_per_fm * (theta_deg.to_radians() / 2.0).sin().powi(2));
            // The bound, and never below 1e-6: the relative accuracy the automatic numerics
            // aim at (NumericsConfig::accuracy default).
            let bound = (2.0 * b / f_c + (b / f_c).powi(2)).max(1e-6);
            let ratio = m.evaluate(&[theta_deg]).expect("evaluates").rows[0].ratio_rutherford.expect("charged");
            assert!((ratio - 1.0).abs() <= bound, "r0 {r0_fm} fm, {theta_deg}°: ratio {ratio}, bound {bound}");
            if r0_fm == "1.30" {
                // The bound itself is small here (3e-4 at 1°, 3e-2 at 10°): the check says
                // something only at forward angles.
                assert!(bound < 0.05, "{theta_deg}°: bound {bound}");
            }
        }
    }

    #[test]
    fn the_sum_radius_convention_scales_the_reduced_radii_by_the_sum_of_cube_roots() {
        // R = r0·58^(1/3) (`target`) and R = r0'·(4^(1/3) + 58^(1/3)) (`sum`) are the same
        // radii when r0' = r0·58^(1/3)/(4^(1/3) + 58^(1/3)): the curves must agree.
        let scale = 58f64.cbrt() / (4f64.cbrt() + 58f64.cbrt());
        let mut sum = OPTICAL.replace("radius: target", "radius: sum");
        for r0 in ["1.20", "1.40", "1.30"] {
            sum = sum
                .replace(&format!("r0_fm: {r0}"), &format!("r0_fm: {}", r0.parse::<f64>().expect("a number") * scale));
        }
        let angles_deg = [20.0, 60.0, 120.0, 170.0];
        let (target, sum) = (model(OPTICAL).evaluate(&angles_deg), model(&sum).evaluate(&angles_deg));
        let (target, sum) = (target.expect("target"), sum.expect("sum"));
        assert_eq!((target.l_max, target.step_fm), (sum.l_max, sum.step_fm));
        for (a, b) in target.rows.iter().zip(&sum.rows) {
            // 1e-10: the radii agree to round-off (1e-16) and the numerics are the same, but
            // backward the partial-wave sum cancels down to σ/σ_R ≈ 4e-3, which amplifies the
            // round-off of ~45 waves (measured 4e-11 at 170°).
            assert_relative_eq!(a.dsdo_cm_mb_sr, b.dsdo_cm_mb_sr, max_relative = 1e-10);
        }
        assert_relative_eq!(
            target.sigma_reaction_mb.expect("absorptive"),
            sum.sigma_reaction_mb.expect("absorptive"),
            max_relative = 1e-10 // as above: the same radii and numerics, round-off only
        );
    }

    #[test]
    fn a_slow_neutron_on_a_hard_sphere_scatters_as_an_s_wave() {
        // For kR ≪ 1 only L = 0 counts: δ_0 = −kR exactly for an impenetrable sphere, so
        //     σ_el = 4π sin²(kR)/k²,   dσ/dΩ(90°) = sin²(kR)/k²
        // (L. I. Schiff, Quantum Mechanics, 3rd ed., section 19, from memory). The L = 1 wave
        // adds (kR)⁴/3 of that to σ (δ_1 ≈ −(kR)³/3) and nothing at 90° (P_1(0) = 0), the
        // others less: the tolerance is (kR)⁴. (E_lab in MeV, R in fm)
        let cases = [(0.01, 1.0), (0.001, 3.0), (0.1, 0.5)];
        for (energy_mev, radius_fm) in cases {
            let yaml = format!(
                "model: hard_sphere\nreaction: {{ beam: n, target: 58Ni, energy_mev: {energy_mev} }}\nradius_fm: {radius_fm}\n"
            );
            let curve = model(&yaml).evaluate(&[90.0]).expect("evaluates");
            let (k, kr) = (curve.k_per_fm, curve.k_per_fm * radius_fm);
            assert!(kr < 0.05, "kR = {kr}");
            let tol = kr.powi(4);
            let s_wave_mb_sr = kr.sin().powi(2) / (k * k) * 10.0; // 10 mb per fm²
            let elastic = curve.sigma_elastic_mb.expect("neutral");
            assert_relative_eq!(elastic, 4.0 * std::f64::consts::PI * s_wave_mb_sr, max_relative = tol);
            assert_relative_eq!(curve.rows[0].dsdo_cm_mb_sr, s_wave_mb_sr, max_relative = tol);
            // No absorption: the optical theorem's σ_tot equals σ_el. 1e-11: 1 − Re S_L = 2
            // sin²δ_L is a difference of numbers near 1 that loses log10(1/δ²) ≈ 3–4 of 16
            // digits.
            assert_relative_eq!(curve.sigma_total_mb.expect("neutral"), elastic, max_relative = 1e-11);
            assert_eq!(curve.sigma_reaction_mb, None);
        }
    }

    #[test]
    fn each_model_reports_the_integrated_cross_sections_it_defines() {
        // (model file, reaction cross section expected (None: not reported; Some(None):
        // reported and clearly absorptive, > 100 mb, where the demo model gives about
        // 1000 mb), total and elastic reported, optical numerics reported)
        let n = "model: hard_sphere\nreaction: { beam: n, target: 58Ni, energy_mev: 1.0 }\nradius_fm: 5.0\n";
        let ruth = "model: rutherford\nreaction: { beam: 4He, target: 58Ni, energy_mev: 24.0 }\n";
        let cases = [
            (OPTICAL.to_string(), Some(None), false, true),
            // A real potential conserves flux, |S_L| = 1: no reaction cross section.
            (OPTICAL.replace("depth_mev: 20.0", "depth_mev: 0.0"), Some(Some(0.0)), false, true),
            (OPTICAL.replace("beam: 4He", "beam: n"), Some(None), true, true),
            (ruth.to_string(), None, false, false),
            (n.to_string(), None, true, false),
        ];
        for (yaml, reaction, total, numerics) in cases {
            let curve = model(&yaml).evaluate(&[30.0]).expect("evaluates");
            match (reaction, curve.sigma_reaction_mb) {
                (None, got) => assert_eq!(got, None, "{yaml}"),
                (Some(None), got) => assert!(got.is_some_and(|s| s > 100.0), "{yaml}: {got:?}"),
                // 1e-10 mb: 1 − |S_L|² is round-off (1e-16) times Σ(2L+1) ≈ 2000 waves'
                // weight, times π/k² · 10 mb/fm² ≈ 8 mb.
                (Some(Some(want)), got) => {
                    assert!(got.is_some_and(|s| (s - want).abs() < 1e-10), "{yaml}: {got:?}");
                }
            }
            assert_eq!(curve.sigma_total_mb.is_some(), total, "{yaml}");
            assert_eq!(curve.sigma_elastic_mb.is_some(), total, "{yaml}");
            assert_eq!((curve.step_fm.is_some(), curve.matching_radii_fm.is_some()), (numerics, numerics), "{yaml}");
        }
    }

    #[test]
    fn a_nucleon_beam_has_an_analyzing_power_column() {
        // (model file, analyzing power reported, nonzero somewhere): nucleons (spin ½) get
        // A_y, zero without a spin-orbit term (B = 0); other beams none.
        let no_so = PROTON.split("  spin_orbit:").next().expect("head").to_string() + "  radius: target\n";
        let n_sphere = "model: hard_sphere\nreaction: { beam: n, target: 58Ni, energy_mev: 1.0 }\nradius_fm: 5.0\n";
        let cases = [
            (PROTON.to_string(), true, true),
            (PROTON.replace("beam: p,", "beam: n,"), true, true),
            (no_so, true, false),
            (n_sphere.to_string(), true, false),
            (OPTICAL.to_string(), false, false),
        ];
        let angles: Vec<f64> = (1..18).map(|i| 10.0 * f64::from(i)).collect();
        for (yaml, reported, nonzero) in cases {
            let curve = model(&yaml).evaluate(&angles).expect("evaluates");
            let ay: Vec<Option<f64>> = curve.rows.iter().map(|r| r.analyzing_power).collect();
            assert_eq!(ay.iter().all(Option::is_some), reported, "{yaml}");
            // 0.05: the spin-orbit term of the demo gives |A_y| up to about 1 (measured);
            // without one, A_y is 2 Im(A·0)/|A|² = 0 exactly.
            assert_eq!(ay.iter().flatten().any(|a| a.abs() > 0.05), nonzero, "{yaml}");
            assert!(ay.iter().flatten().all(|a| a.abs() <= 1.0), "{yaml}");
        }
    }

    #[test]
    fn relativistic_kinematics_is_chosen_in_the_reaction() {
        // reaction.kinematics: relativistic gives k = p_cm/ħc with the relativistic CM
        // momentum, larger than the non-relativistic k by about T/(4 m_p) for 30 MeV
        // protons on 58Ni (expanding p² = m_A² T(T + 2m_a)/s against 2μE; common practice):
        // between 0.5 and 1.5 times that.
        let rel = PROTON.replace("energy_mev: 30.0 }", "energy_mev: 30.0, kinematics: relativistic }");
        let (nr, rel) = (model(PROTON).evaluate(&[30.0]), model(&rel).evaluate(&[30.0]));
        let (nr, rel) = (nr.expect("evaluates"), rel.expect("evaluates"));
        let (excess, estimate) = (rel.k_per_fm / nr.k_per_fm - 1.0, 30.0 / (4.0 * 938.27));
        assert!(excess > 0.5 * estimate && excess < 1.5 * estimate, "{excess} vs {estimate}");
        // η = Z_a Z_A α μ/p rises: the relative velocity p/μ falls below its
        // non-relativistic value (μ, the reduced total energy, grows by about 3 %).
        assert!(rel.eta > nr.eta, "{} vs {}", rel.eta, nr.eta);
    }
}
