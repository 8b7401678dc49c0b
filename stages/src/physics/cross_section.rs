//! The absolute differential cross section in the lab frame from a peak's net counts.

use super::constants::{MB_PER_CM2, SR_PER_MSR};

/// Lab differential cross section in mb/sr:
///     dσ/dΩ_lab = Y / (ε · f_live · L · ΔΩ),   L = N_beam · n_t
/// Y: net counts, ε: detection efficiency, f_live: live fraction, L: integrated luminosity
/// in 1/cm² (beam particles times target atoms per cm², or from a Rutherford monitor),
/// ΔΩ: solid angle in sr (here given in msr). The result in
/// cm²/sr is converted with 1 mb = 1e-27 cm². Holds for a thin target and a solid angle
/// small enough that dσ/dΩ is constant across it (common practice; the definition of the
/// differential cross section as rate per incident flux per scatterer per solid angle).
///
/// Returns the cross section per net count, in mb/sr, so that the caller can scale both the
/// value and its statistical error by the same factor.
pub fn lab_mb_sr_per_count(efficiency: f64, live_fraction: f64, luminosity_per_cm2: f64, solid_angle_msr: f64) -> f64 {
    MB_PER_CM2 / (efficiency * live_fraction * luminosity_per_cm2 * solid_angle_msr * SR_PER_MSR)
}
