//! The absolute differential cross section in the lab frame from a peak's net counts.

use super::constants::{MB_PER_CM2, SR_PER_MSR};

/// Lab differential cross section in mb/sr:
///     dσ/dΩ_lab = Y / (ε · f_live · N_beam · n_t · ΔΩ)
/// Y: net counts, ε: detection efficiency, f_live: live fraction, N_beam: beam particles,
/// n_t: target atoms per cm², ΔΩ: solid angle in sr (here given in msr). The result in
/// cm²/sr is converted with 1 mb = 1e-27 cm². Holds for a thin target and a solid angle
/// small enough that dσ/dΩ is constant across it (common practice; the definition of the
/// differential cross section as rate per incident flux per scatterer per solid angle).
///
/// Returns the cross section per net count, in mb/sr, so that the caller can scale both the
/// value and its statistical error by the same factor.
pub fn lab_mb_sr_per_count(
    efficiency: f64,
    live_fraction: f64,
    beam_particles: f64,
    target_atoms_per_cm2: f64,
    solid_angle_msr: f64,
) -> f64 {
    MB_PER_CM2 / (efficiency * live_fraction * beam_particles * target_atoms_per_cm2 * solid_angle_msr * SR_PER_MSR)
}
