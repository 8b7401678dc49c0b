//! Nuclear stopping: elastic Coulomb collisions with the target's screened nuclei, by the
//! universal (ZBL) interatomic potential.

use super::material::Component;
use super::Ion;
use crate::physics::constants::AVOGADRO_PER_MOL;

/// Reduced nuclear stopping of the universal potential as a function of the reduced
/// energy ε:
///     s_n(ε) = ln(1 + 1.1383 ε) / (2 [ε + 0.01321 ε^0.21226 + 0.19593 ε^0.5])   (ε ≤ 30)
///     s_n(ε) = ln(ε) / (2ε)                                                   (ε > 30)
/// Source: J. F. Ziegler, J. P. Biersack, U. Littmark, The Stopping and Range of Ions in
/// Solids (Pergamon 1985), ch. 2 (coefficients from memory). Accurate to about 5 % of the
/// universal potential's exact result; the potential itself fits measured interatomic
/// potentials to about 5 % on average.
pub fn reduced_nuclear_stopping(epsilon: f64) -> f64 {
    if epsilon <= 30.0 {
        (1.1383 * epsilon).ln_1p() / (2.0 * (epsilon + 0.01321 * epsilon.powf(0.21226) + 0.19593 * epsilon.sqrt()))
    } else {
        epsilon.ln() / (2.0 * epsilon)
    }
}

/// Nuclear mass stopping power of element `target` for `ion` at lab kinetic energy
/// `energy_mev`, in MeV cm²/g:
///     ε = 32.53 M₂ E / (Z₁ Z₂ (M₁ + M₂)(Z₁^0.23 + Z₂^0.23))       (E in keV, M in u)
///     S_n = 8.462 Z₁ Z₂ M₁ s_n(ε) / ((M₁ + M₂)(Z₁^0.23 + Z₂^0.23))  eV/(10¹⁵ atoms/cm²)
/// converted with N_A/A₂ atoms per gram. Source: Ziegler, Biersack, Littmark (1985), ch. 2
/// (from memory). It holds at all energies, and matters only below about 0.1 MeV/u
/// (there it reaches half of the total stopping for heavy ions).
pub fn nuclear_mev_cm2_g(ion: &Ion, target: &Component, energy_mev: f64) -> f64 {
    let (z1, z2) = (f64::from(ion.z), f64::from(target.z));
    let m1 = ion.mass_u();
    let m2 = target.molar_mass_g_mol;
    let screening = z1.powf(0.23) + z2.powf(0.23);
    let epsilon = 32.53 * m2 * energy_mev * 1e3 / (z1 * z2 * (m1 + m2) * screening);
    let ev_per_1e15_atoms_cm2 = 8.462 * z1 * z2 * m1 * reduced_nuclear_stopping(epsilon) / ((m1 + m2) * screening);
    ev_per_1e15_atoms_cm2 * 1e-15 * 1e-6 * AVOGADRO_PER_MOL / m2
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::physics::stopping::material::Material;
    use approx::assert_relative_eq;

    #[test]
    fn reduced_stopping_has_its_published_shape() {
        // (ε, s_n): the closed forms above evaluated independently (Python float) and
        // rounded to 4 digits, hence the tolerance 1e-3; the two branches meet at ε = 30
        // within 1 % (0.05723 and 0.05669), checked with 2 %.
        for (epsilon, s_n) in [(1.0, 0.3143), (0.3, 0.3518), (100.0, 0.023_03)] {
            assert_relative_eq!(reduced_nuclear_stopping(epsilon), s_n, max_relative = 1e-3);
        }
        let below = reduced_nuclear_stopping(30.0);
        let above = reduced_nuclear_stopping(30.0 + 1e-9);
        assert_relative_eq!(below, above, max_relative = 0.02);
    }

    #[test]
    fn nuclear_stopping_is_small_at_beam_energies() {
        // Nuclear stopping is below 0.1 % of the total for 24 MeV alphas in Ni (total about
        // 180 MeV cm²/g, pycatima 1.982; S_n ≈ 0.1) and above half of it for 58Ni in Ni at
        // 10 keV/u (pycatima total 2856 MeV cm²/g; S_n ≈ 1786, Python evaluation of the
        // same formulas).
        let ni = Material::parse("Ni").expect("Ni");
        let c = &ni.components[0];
        let alpha = Ion::from_mass_u(2, 4.0015);
        assert!(nuclear_mev_cm2_g(&alpha, c, 24.0) < 1e-3 * 180.0);
        let nickel = Ion::from_mass_u(28, 57.95);
        let s_n = nuclear_mev_cm2_g(&nickel, c, 0.01 * 57.95);
        assert!(s_n > 0.5 * 2856.0 && s_n < 2856.0, "{s_n}");
    }
}
