//! Stage `compute_solid_angle`: each detector's solid angle from its aperture geometry, with
//! the uncertainty propagated from the geometric tolerances by the partial derivatives.
//! Adds `solid_angle_msr` and `solid_angle_err_msr`.

use polars::prelude::DataFrame;
use schemars::JsonSchema;
use serde::Deserialize;

use crate::physics::solid_angle;
use crate::physics::uncertainty::propagate;
use crate::setup::{ApertureConfig, DetectorConfig};
use crate::table::{row_detectors, with_f64_columns};
use crate::{Problem, RunContext, Stage, StageError};

/// Settings of `compute_solid_angle` (the geometry belongs to the detectors).
#[derive(Debug, Clone, Default, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct ComputeSolidAngleConfig {}

/// The built stage.
#[derive(Debug, Clone)]
pub struct ComputeSolidAngle;

impl ComputeSolidAngleConfig {
    /// Build the stage.
    ///
    /// # Errors
    /// None today; the geometry was checked with the set-up.
    pub fn build(&self) -> Result<ComputeSolidAngle, Vec<Problem>> {
        Ok(ComputeSolidAngle)
    }
}

/// Solid angle of a detector in msr and its standard uncertainty (GUM Eq. 10 with the
/// analytic derivatives of [`solid_angle::circle`] and [`solid_angle::rectangle`]; the
/// tolerances of distance and sizes taken as independent).
pub fn detector_solid_angle_msr(det: &DetectorConfig) -> (f64, f64) {
    let d = det.distance_mm.unwrap_or(f64::NAN);
    let (omega, errs) = match det.aperture {
        ApertureConfig::Given { solid_angle_msr, solid_angle_err_msr } => {
            return (solid_angle_msr, solid_angle_err_msr)
        }
        ApertureConfig::Circle { radius_mm, radius_err_mm } => {
            (solid_angle::circle(d, radius_mm), [det.distance_err_mm, radius_err_mm, 0.0])
        }
        ApertureConfig::Rectangle { half_width_mm, half_height_mm, half_width_err_mm, half_height_err_mm } => (
            solid_angle::rectangle(d, half_width_mm, half_height_mm),
            [det.distance_err_mm, half_width_err_mm, half_height_err_mm],
        ),
    };
    let err_sr = propagate(&[omega.d_distance, omega.d_size_1, omega.d_size_2], &errs);
    (omega.sr * 1e3, err_sr * 1e3)
}

impl Stage for ComputeSolidAngle {
    fn name(&self) -> &'static str {
        "compute_solid_angle"
    }
    fn needs(&self) -> Vec<&'static str> {
        vec!["detector"]
    }
    fn adds(&self) -> Vec<&'static str> {
        vec!["solid_angle_msr", "solid_angle_err_msr"]
    }
    fn run(&self, table: DataFrame, ctx: &RunContext<'_>) -> Result<DataFrame, StageError> {
        let (omega, err): (Vec<f64>, Vec<f64>) =
            row_detectors(&table, ctx.setup)?.into_iter().map(detector_solid_angle_msr).unzip();
        with_f64_columns(table, vec![("solid_angle_msr", omega), ("solid_angle_err_msr", err)])
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    fn detector(aperture: &str, distance: &str) -> DetectorConfig {
        serde_yaml::from_str(&format!("{{ id: A, theta_lab_deg: 30.0, {distance} aperture: {aperture} }}"))
            .expect("detector parses")
    }

    /// The solid angle with every length moved by its tolerance times `k` (one at a time),
    /// for a finite-difference check of the propagated error.
    fn moved(aperture: &str, d: f64, sizes: [f64; 2], which: usize, h: f64) -> f64 {
        let mut v = [d, sizes[0], sizes[1]];
        v[which] += h;
        let a = aperture.replace("R0", &v[1].to_string()).replace("R1", &v[2].to_string());
        detector_solid_angle_msr(&detector(&a, &format!("distance_mm: {},", v[0]))).0
    }

    #[test]
    fn solid_angles_in_msr_with_errors_from_the_tolerances() {
        // (aperture with sizes R0, R1, the sizes, their tolerances and the distance's)
        let cases = [
            ("{ shape: circle, radius_mm: R0, radius_err_mm: 0.01 }", [2.5, 0.0], [0.5, 0.01, 0.0]),
            (
                "{ shape: rectangle, half_width_mm: R0, half_height_mm: R1, half_width_err_mm: 0.02, half_height_err_mm: 0.03 }",
                [2.2, 3.0],
                [0.5, 0.02, 0.03],
            ),
        ];
        let d = 250.0;
        for (aperture, sizes, tolerances) in cases {
            let a = aperture.replace("R0", &sizes[0].to_string()).replace("R1", &sizes[1].to_string());
            let (omega, err) =
                detector_solid_angle_msr(&detector(&a, &format!("distance_mm: {d}, distance_err_mm: 0.5,")));
            // GUM Eq. 10 with central differences (step 1e-4 mm) in place of the analytic
            // derivatives. 1e-6: their truncation, ~(h/r)²/6 ≈ 3e-10, and their round-off: Ω
            // cancels in 1 − d/√(d² + r²), so its absolute error ~2πε over 2h can reach 1e-6 of
            // the distance term (measured 1.2e-11).
            let h = 1e-4;
            let fd: f64 = (0..3)
                .map(|k| {
                    let slope = (moved(aperture, d, sizes, k, h) - moved(aperture, d, sizes, k, -h)) / (2.0 * h);
                    (slope * tolerances[k]).powi(2)
                })
                .sum::<f64>()
                .sqrt();
            assert_relative_eq!(err, fd, max_relative = 1e-6);
            assert!(omega > 0.0 && err > 0.0);
        }
        // The circle against its closed form, 2π(1 − d/√(d² + r²)) sr (common practice).
        let (omega, _) =
            detector_solid_angle_msr(&detector("{ shape: circle, radius_mm: 2.5 }", "distance_mm: 250.0,"));
        let exact = 2.0 * std::f64::consts::PI * (1.0 - 250.0 / (250.0f64.powi(2) + 2.5f64.powi(2)).sqrt()) * 1e3;
        // 1e-10 (tightened from 1e-9): both sides cancel in 1 − d/√(d² + r²) = 5e-5, so each
        // carries a relative error up to ~4e-12 (measured 1.5e-12).
        assert_relative_eq!(omega, exact, max_relative = 1e-10);
        // A given solid angle passes through unchanged.
        let given = detector("{ shape: given, solid_angle_msr: 1.962, solid_angle_err_msr: 0.012 }", "");
        let (omega, err) = detector_solid_angle_msr(&given);
        // 1e-15: passed through unchanged.
        assert_relative_eq!(omega, 1.962, max_relative = 1e-15);
        assert_relative_eq!(err, 0.012, max_relative = 1e-15);
    }
}
