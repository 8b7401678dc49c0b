//! Absolute normalisation: how many beam particles crossed how many target atoms.

use super::constants::{AVOGADRO_PER_MOL, ELEMENTARY_CHARGE_C};

/// Number of beam particles from the integrated charge:
///     N_beam = Q / (q e)
/// Q: integrated charge in C, q: charge state of the ions at the collector (whole number),
/// e: elementary charge in C (CODATA 2018). Holds when the collector (Faraday cup) sees every
/// ion at charge state q, with secondary electrons suppressed (common practice).
pub fn beam_particles(charge_c: f64, charge_state: u32) -> f64 {
    charge_c / (f64::from(charge_state) * ELEMENTARY_CHARGE_C)
}

/// Scattering centres per cm² seen by the beam:
///     n_t = (ρx) N_A / M · f_iso / cos(α)
/// ρx: areal density in g/cm² along the foil normal, N_A: Avogadro constant in 1/mol
/// (CODATA 2018), M: molar mass in g/mol, f_iso: atom fraction of the scattering isotope,
/// α: angle between the foil normal and the beam in rad (the path is ρx / cos α).
/// Holds for a uniform foil thin enough that the beam energy loss is negligible
/// (common practice).
pub fn target_atoms_per_cm2(
    areal_density_g_cm2: f64,
    molar_mass_g_mol: f64,
    isotopic_fraction: f64,
    tilt_rad: f64,
) -> f64 {
    areal_density_g_cm2 * AVOGADRO_PER_MOL / molar_mass_g_mol * isotopic_fraction / tilt_rad.cos()
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn one_microcoulomb_of_alpha_particles() {
        // 1 µC of He2+: 1e-6 / (2 × 1.602176634e-19) = 3.12075454e12 ions; worked by hand
        // from the CODATA 2018 value of e. 1e-15: one product and one division.
        assert_relative_eq!(beam_particles(1e-6, 2), 1e-6 / (2.0 * 1.602_176_634e-19), max_relative = 1e-15);
        // 2e-9 (tightened from 1e-7; the old value, 3.1207547e12, was 5.2e-8 off): the hand
        // value has 9 digits, half a unit in the last is 1.6e-9.
        assert_relative_eq!(beam_particles(1e-6, 2), 3.120_754_54e12, max_relative = 2e-9);
    }

    #[test]
    fn one_mole_per_cm2_is_avogadro_atoms_and_tilt_lengthens_the_path() {
        // 12 g/cm² of carbon-12 (M = 12 g/mol) holds N_A atoms per cm² (definition of the mole).
        // 1e-15: a product and a division; 1e-14 below: the cosine of 60° is 0.5 to 1e-16.
        assert_relative_eq!(target_atoms_per_cm2(12.0, 12.0, 1.0, 0.0), 6.022_140_76e23, max_relative = 1e-15);
        // At 60° tilt the path doubles (cos 60° = 1/2).
        assert_relative_eq!(
            target_atoms_per_cm2(12.0, 12.0, 0.5, 60f64.to_radians()),
            6.022_140_76e23,
            max_relative = 1e-14
        );
    }
}
