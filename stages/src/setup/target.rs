//! The `target:` section: the foil's areal density, molar mass, isotopic fraction and tilt,
//! as written, with its range checks. The normalisation stages turn it into atoms per cm².

use schemars::JsonSchema;
use serde::Deserialize;

use super::one;
use crate::problem::Checks;
use crate::Problem;

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
    /// Light impurities of the foil (carbon build-up, oxide): the elastic peak of the beam
    /// on each is fitted as a peak of no state where it falls inside a peak fit's region
    /// (`raw.background: peak_fit_*`); `xsflow simulate` puts these peaks into the spectra
    /// and `xsflow beamtime` counts their rate. Default none.
    #[serde(default)]
    pub contaminants: Vec<ContaminantConfig>,
}

/// One impurity of the target foil.
#[derive(Debug, Clone, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct ContaminantConfig {
    /// The nuclide (`12C`, `16O`).
    pub nuclide: String,
    /// Its areal density in µg/cm² along the foil normal; > 0.
    pub areal_density_ug_cm2: f64,
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
        for (i, k) in self.contaminants.iter().enumerate() {
            let known = crate::physics::nuclide::parse(&k.nuclide).is_ok_and(|n| n.z > 0);
            c.require(
                known,
                &format!("contaminants[{i}].nuclide"),
                &k.nuclide,
                "a charged nuclide of the mass table, e.g. 12C",
            );
            c.positive(&format!("contaminants[{i}].areal_density_ug_cm2"), k.areal_density_ug_cm2);
        }
        c.problems
    }
}
