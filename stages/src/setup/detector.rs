//! The `detectors:` section: each detector's id, lab angle, distance, defining aperture and
//! efficiency (constant or tabulated), as written, with its range checks. The solid-angle
//! and efficiency stages read these.

use schemars::JsonSchema;
use serde::Deserialize;

use super::{one, Id};
use crate::problem::Checks;
use crate::Problem;

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
