//! Theory curves: the model file (`model: optical`, `rutherford` or `hard_sphere`), as
//! written, and its evaluation into dσ/dΩ_cm at chosen CM angles. All models use the
//! non-relativistic elastic channel of [`crate::physics::optical::ElasticChannel`] with
//! nuclear masses from the AME2020 table.

use schemars::JsonSchema;
use serde::{Deserialize, Serialize};

use crate::physics::nuclide::{self, Nuclide};
use crate::physics::optical::{self, ElasticChannel, Numerics, OpticalPotential, WoodsSaxon};
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
                let (ma, mt) = (b.nuclear_mass_mev(), t.nuclear_mass_mev());
                let ch = ElasticChannel {
                    reduced_mass_mev: ma * mt / (ma + mt),
                    e_cm_mev: self.energy_mev * mt / (ma + mt),
                    charge_product: f64::from(b.z * t.z),
                };
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
                for (key, t) in [
                    ("real", potential.real),
                    ("imag_volume", potential.imag_volume),
                    ("imag_surface", potential.imag_surface),
                ] {
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
        let thetas: Vec<f64> = angles_deg.iter().map(|d| d.to_radians()).collect();
        let rows = angles_deg
            .iter()
            .zip(waves.curve(&thetas))
            .map(|(d, (dsdo, ratio))| CurveRow { theta_cm_deg: *d, dsdo_cm_mb_sr: dsdo, ratio_rutherford: ratio })
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
