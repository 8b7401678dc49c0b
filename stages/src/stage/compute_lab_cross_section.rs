//! Stage `compute_lab_cross_section`: the absolute lab-frame differential cross section of
//! each peak, with its uncertainty in three separate parts:
//!
//! - `stat_err_lab_mb_sr`: counting statistics of the peak and its background, and a
//!   detector's own live-fraction error where each detector has its own dead time (see
//!   [`live_fraction_rel_err`]): both independent between detectors and runs;
//! - `sys_err_lab_mb_sr`: point-to-point systematic (efficiency, solid angle, window
//!   acceptance), which differs between detectors;
//! - the common normalisation (charge, target, the run's one live fraction, or the monitor), the same
//!   relative error for every point of a run, is `norm_rel_err`, added by `normalise` and
//!   kept apart so that fits can treat it as one scale factor.
//!
//! Where `subtract_background` gave a peak consistent with zero an interval on its signal
//! counts (`counts_net_lower`, `counts_net_upper`), the same factor k = dσ/dΩ per count turns
//! it into `dsdo_lab_lower_mb_sr` and `dsdo_lab_upper_mb_sr` (empty for the other rows).
//! The factor itself is `dsdo_lab_mb_sr_per_count`, so that a fit can turn a model cross
//! section back into expected counts.

use polars::prelude::DataFrame;
use schemars::JsonSchema;
use serde::Deserialize;

use crate::physics::cross_section::lab_mb_sr_per_count;
use crate::physics::uncertainty::quadrature;
use crate::stage::correct_dead_time::live_fraction_rel_err;
use crate::table::{f64_values, f64_values_or, with_f64_columns, with_scaled_optional_columns};
use crate::{Problem, RunContext, Stage, StageError};

/// Settings of `compute_lab_cross_section` (none yet).
#[derive(Debug, Clone, Default, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct ComputeLabCrossSectionConfig {}

/// The built stage.
#[derive(Debug, Clone)]
pub struct ComputeLabCrossSection;

impl ComputeLabCrossSectionConfig {
    /// Build the stage.
    ///
    /// # Errors
    /// None today.
    pub fn build(&self) -> Result<ComputeLabCrossSection, Vec<Problem>> {
        Ok(ComputeLabCrossSection)
    }
}

/// Inputs of one point's lab cross section, each with its standard uncertainty where it
/// enters the point-to-point errors.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LabPoint {
    /// Net counts Y and u(Y).
    pub counts_net: (f64, f64),
    /// Window acceptance A (the fraction of the peak the window and side bands keep) and
    /// u(A); (1, 0) for yields without it.
    pub window_acceptance: (f64, f64),
    /// Efficiency ε and u(ε).
    pub efficiency: (f64, f64),
    /// Solid angle in msr and its uncertainty.
    pub solid_angle_msr: (f64, f64),
    /// Live fraction and the part of its uncertainty that is this detector's own
    /// (per-detector dead time); 0 when one live fraction holds for the whole run, whose
    /// error is in the normalisation.
    pub live_fraction: (f64, f64),
    /// Integrated luminosity in 1/cm² (its error is in the normalisation).
    pub luminosity_per_cm2: f64,
}

/// A lab cross section with its statistical and point-to-point uncertainty.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LabCrossSection {
    /// dσ/dΩ_lab in mb/sr.
    pub dsdo_mb_sr: f64,
    /// Statistical standard uncertainty in mb/sr.
    pub stat_err_mb_sr: f64,
    /// Point-to-point systematic standard uncertainty in mb/sr.
    pub sys_err_mb_sr: f64,
    /// k = dσ/dΩ_lab per net count, mb/sr.
    pub mb_sr_per_count: f64,
}

/// dσ/dΩ_lab = Y / (A ε f_live L ΔΩ) (see [`lab_mb_sr_per_count`]; A, the window
/// acceptance, divides the counts like an efficiency:
/// [`window_acceptance`](crate::physics::peak_acceptance::window_acceptance)) and its
/// uncertainty. For a product of powers of independent inputs the relative uncertainties add
/// in quadrature (JCGM 100:2008, section 5.1.6), grouped as
///     u_stat = sqrt((k u(Y))² + (σ u_own(f)/f)²),
///     u_sys = |σ| sqrt((u(A)/A)² + (u(ε)/ε)² + (u(ΔΩ)/ΔΩ)²),   k = σ / Y
/// with u_own(f) the detector's own live-fraction error (0 for the run's one live fraction).
/// The counting part is k·u(Y) rather than |σ|·u(Y)/Y, so that a peak with zero net
/// counts keeps its honest error.
pub fn lab_cross_section(p: &LabPoint) -> LabCrossSection {
    let (live_fraction, live_own_err) = p.live_fraction;
    let k = lab_mb_sr_per_count(p.efficiency.0, live_fraction, p.luminosity_per_cm2, p.solid_angle_msr.0)
        / p.window_acceptance.0;
    let dsdo = k * p.counts_net.0;
    let counting = k * p.counts_net.1;
    LabCrossSection {
        dsdo_mb_sr: dsdo,
        stat_err_mb_sr: if live_own_err == 0.0 {
            counting
        } else {
            quadrature(&[counting, dsdo * live_own_err / live_fraction])
        },
        sys_err_mb_sr: dsdo.abs()
            * quadrature(&[
                p.window_acceptance.1 / p.window_acceptance.0,
                p.efficiency.1 / p.efficiency.0,
                p.solid_angle_msr.1 / p.solid_angle_msr.0,
            ]),
        mb_sr_per_count: k,
    }
}

const INPUTS: [&str; 9] = [
    "counts_net",
    "counts_net_err",
    "efficiency",
    "efficiency_err",
    "solid_angle_msr",
    "solid_angle_err_msr",
    "live_fraction",
    "luminosity_per_cm2",
    "live_fraction_err",
];

/// The interval on the signal counts and the lab cross sections it becomes.
const INTERVAL_COLUMNS: [(&str, &str); 2] =
    [("counts_net_lower", "dsdo_lab_lower_mb_sr"), ("counts_net_upper", "dsdo_lab_upper_mb_sr")];

impl Stage for ComputeLabCrossSection {
    fn name(&self) -> &'static str {
        "compute_lab_cross_section"
    }
    fn needs(&self) -> Vec<&'static str> {
        INPUTS.to_vec()
    }
    fn adds(&self) -> Vec<&'static str> {
        vec!["dsdo_lab_mb_sr", "stat_err_lab_mb_sr", "sys_err_lab_mb_sr", "dsdo_lab_mb_sr_per_count"]
    }
    fn run(&self, table: DataFrame, _ctx: &RunContext<'_>) -> Result<DataFrame, StageError> {
        let cols = INPUTS.iter().map(|name| f64_values(&table, name)).collect::<Result<Vec<_>, _>>()?;
        let pair = |i: usize, row: usize| (cols[i][row], cols[i + 1][row]);
        let acceptance = f64_values_or(&table, "window_acceptance", 1.0)?;
        let acceptance_err = f64_values_or(&table, "window_acceptance_err", 0.0)?;
        let live_own_rel_err = live_fraction_rel_err(&cols[6], &cols[8]).own;
        let points: Vec<LabCrossSection> = (0..table.height())
            .map(|r| {
                lab_cross_section(&LabPoint {
                    counts_net: pair(0, r),
                    window_acceptance: (acceptance[r], acceptance_err[r]),
                    efficiency: pair(2, r),
                    solid_angle_msr: pair(4, r),
                    live_fraction: (cols[6][r], cols[6][r] * live_own_rel_err[r]),
                    luminosity_per_cm2: cols[7][r],
                })
            })
            .collect();
        let per_count: Vec<f64> = points.iter().map(|p| p.mb_sr_per_count).collect();
        let table = with_f64_columns(
            table,
            vec![
                ("dsdo_lab_mb_sr", points.iter().map(|p| p.dsdo_mb_sr).collect()),
                ("stat_err_lab_mb_sr", points.iter().map(|p| p.stat_err_mb_sr).collect()),
                ("sys_err_lab_mb_sr", points.iter().map(|p| p.sys_err_mb_sr).collect()),
                ("dsdo_lab_mb_sr_per_count", per_count.clone()),
            ],
        )?;
        with_scaled_optional_columns(table, &INTERVAL_COLUMNS, &per_count)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn lab_cross_sections_and_their_error_parts() {
        // L = 1e30 /cm² and ΔΩ = 1 msr give 1e27 mb / (1e30 · 1e-3) = 1 mb/sr per count
        // when ε = f_live = 1 (worked by hand). Columns: counts (Y, u), efficiency (ε, u),
        // solid angle (msr, u), live fraction (f, its own u), window acceptance (A, u), then
        // dσ/dΩ, stat, sys expected.
        let cases = [
            ((100.0, 10.0), (1.0, 0.0), (1.0, 0.0), (1.0, 0.0), (1.0, 0.0), (100.0, 10.0, 0.0)),
            // 1 % on ε and on ΔΩ: sys = 100 · √2 · 1 %; k = 1e27 / (0.5 · 1e30 · 2e-3) = 1.
            ((100.0, 10.0), (0.5, 0.005), (2.0, 0.02), (1.0, 0.0), (1.0, 0.0), (100.0, 10.0, 2f64.sqrt())),
            // Half live: twice the cross section and its counting error.
            ((50.0, 7.0), (1.0, 0.0), (1.0, 0.0), (0.5, 0.0), (1.0, 0.0), (100.0, 14.0, 0.0)),
            // A detector's own live fraction 0.5 ± 0.05 (10 %) adds 10 mb/sr to its
            // statistical error: √(14² + 10²).
            ((50.0, 7.0), (1.0, 0.0), (1.0, 0.0), (0.5, 0.05), (1.0, 0.0), (100.0, 296f64.sqrt(), 0.0)),
            // No net counts keep their counting error (k · u(Y), not |σ| u(Y)/Y).
            ((0.0, 1.841), (1.0, 0.01), (1.0, 0.0), (1.0, 0.0), (1.0, 0.0), (0.0, 1.841, 0.0)),
            // A window keeping 80 % ± 1 % of the peak: 100/0.8 = 125, stat 10/0.8 = 12.5,
            // sys 125 · 1.25 % = 1.5625.
            ((100.0, 10.0), (1.0, 0.0), (1.0, 0.0), (1.0, 0.0), (0.8, 0.01), (125.0, 12.5, 1.5625)),
        ];
        for (counts_net, efficiency, solid_angle_msr, live_fraction, window_acceptance, (dsdo, stat, sys)) in cases {
            let got = lab_cross_section(&LabPoint {
                counts_net,
                window_acceptance,
                efficiency,
                solid_angle_msr,
                live_fraction,
                luminosity_per_cm2: 1e30,
            });
            // 1e-12: a product of five factors and a quadrature sum, some tens of roundings;
            // epsilon 1e-15 for the cases without a systematic error (exactly 0).
            assert_relative_eq!(got.dsdo_mb_sr, dsdo, max_relative = 1e-12);
            assert_relative_eq!(got.stat_err_mb_sr, stat, max_relative = 1e-12);
            assert_relative_eq!(got.sys_err_mb_sr, sys, max_relative = 1e-12, epsilon = 1e-15);
        }
    }
}
