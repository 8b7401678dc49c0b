//! Electronic stopping at low energy: below [`JOIN_ENERGY_MEV_PER_U`] the Bethe formula
//! fails (its stopping number turns negative near the stopping maximum), and the stopping
//! is taken from an interpolation between velocity-proportional stopping and a Bethe-like
//! term that stays positive.
//!
//! Accuracy, measured against pycatima 1.982 (total stopping; its low-energy electronic
//! stopping is the SRIM proton fits scaled by an effective charge), see
//! `tests/stopping.rs`: at 0.1 MeV/u from +9 % to −74 % for 1H (C, Al, Ni, Au, C10H8O4),
//! −11 %/−69 % for 4He, +4 %/−48 % for 16O and +48 %/−13 % for 58Ni; at 1 MeV/u within
//! 9 % in targets up to Ni but −34 % in Au. The errors grow with the target's Z because the held shell
//! correction of [`super::bethe`] is too large for heavy targets below about 5 MeV/u.
//! Good enough to finish a range integral (the part of a range below 1 MeV/u is a few per
//! cent of the range of a beam above 5 MeV/u), not for stopping powers at these energies.

use super::bethe::{self, bethe_k_mev_cm2_mol, effective_charge};
use super::material::Component;
use super::Ion;
use crate::physics::constants::ELECTRON_MASS_MEV;

/// Energy per nucleon (MeV/u) below which [`electronic_mev_cm2_g`] leaves the Bethe
/// formula for the low-energy interpolation.
pub const JOIN_ENERGY_MEV_PER_U: f64 = 1.0;

/// The positive Bethe-like term of the interpolation, MeV cm²/g:
///     S_H = K q² (Z₂/A₂) (1/β²) ln(1 + 2 m_e c² β²γ²/I)
/// the high-energy form of the proton fits of H. H. Andersen, J. F. Ziegler, Hydrogen
/// Stopping Powers and Ranges in All Elements (Pergamon 1977), S_high = (A₃/E)
/// ln(1 + A₄/E + A₅E), with A₅ fixed by I and A₄ left out (from memory).
fn bethe_positive_mev_cm2_g(ion: &Ion, target: &Component, energy_mev: f64) -> f64 {
    let (beta2, gamma) = ion.beta2_gamma(energy_mev);
    let q = effective_charge(ion.z, beta2.sqrt());
    let z2 = f64::from(target.z);
    let x = 2.0 * ELECTRON_MASS_MEV * beta2 * gamma * gamma / (target.mean_excitation_ev * 1e-6);
    bethe_k_mev_cm2_mol() * q * q * z2 / (target.molar_mass_g_mol * beta2) * x.ln_1p()
}

/// Electronic mass stopping power in MeV cm²/g at any energy: the Bethe formula
/// ([`bethe::electronic_mev_cm2_g`]) at and above [`JOIN_ENERGY_MEV_PER_U`]; below it the
/// harmonic interpolation
///     1/S = 1/S_H(E) + 1/S_L(E),   S_L = k √E
/// of a velocity-proportional low-energy stopping S_L (J. Lindhard, M. Scharff, Phys. Rev.
/// 124 (1961) 128: S ∝ v for v < v₀ Z₁^(2/3)) and the positive Bethe-like S_H
/// (`bethe_positive_mev_cm2_g`), the form of H. H. Andersen, J. F. Ziegler (Pergamon
/// 1977) and of J. F. Ziegler, J. P. Biersack, U. Littmark, The Stopping and Range of Ions
/// in Solids (Pergamon 1985) after A. Varelas, J. P. Biersack, Nucl. Instrum. Methods 79
/// (1970) 213. Their per-element fit coefficients are not used: k is fixed by continuity
/// with the Bethe formula at the join, 1/(k √E_j) = 1/S_Bethe(E_j) − 1/S_H(E_j) (when
/// that is not positive, S = S_H · S_Bethe(E_j)/S_H(E_j) below the join instead), so the
/// stopping is continuous but only approximate below the join (accuracy in the module
/// comment).
pub fn electronic_mev_cm2_g(ion: &Ion, target: &Component, energy_mev: f64) -> f64 {
    let join_mev = JOIN_ENERGY_MEV_PER_U * ion.mass_u();
    if energy_mev >= join_mev {
        return bethe::electronic_mev_cm2_g(ion, target, energy_mev);
    }
    let at_join = bethe::electronic_mev_cm2_g(ion, target, join_mev);
    let high_at_join = bethe_positive_mev_cm2_g(ion, target, join_mev);
    let high = bethe_positive_mev_cm2_g(ion, target, energy_mev);
    let low_inverse_at_join = 1.0 / at_join - 1.0 / high_at_join;
    if low_inverse_at_join <= 0.0 {
        return high * at_join / high_at_join;
    }
    1.0 / (1.0 / high + low_inverse_at_join * (join_mev / energy_mev).sqrt())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::physics::stopping::material::Material;
    use approx::assert_relative_eq;

    #[test]
    fn low_energy_form_joins_the_bethe_formula_and_falls_to_zero_speed() {
        // (ion, target): continuous at the join (1e-9: the two sides are evaluated 1e-13
        // apart in energy), and far below the stopping maximum S rises with energy, at
        // most in proportion to it (S_L ∝ √E; S_H ∝ q² ∝ E for ions at low speed):
        // S(E/100)/S(E/10⁴) lies in (1, 100].
        for (ion, target) in [
            (Ion::from_mass_u(1, 1.007), "C"),
            (Ion::from_mass_u(2, 4.0015), "Ni"),
            (Ion::from_mass_u(28, 57.95), "Au"),
        ] {
            let material = Material::parse(target).expect("material");
            let c = &material.components[0];
            let join = JOIN_ENERGY_MEV_PER_U * ion.mass_u();
            let below = electronic_mev_cm2_g(&ion, c, join * (1.0 - 1e-13));
            let above = bethe::electronic_mev_cm2_g(&ion, c, join);
            assert_relative_eq!(below, above, max_relative = 1e-9);
            let ratio = electronic_mev_cm2_g(&ion, c, join * 1e-2) / electronic_mev_cm2_g(&ion, c, join * 1e-4);
            assert!(ratio > 1.0 && ratio <= 100.0, "{target}: {ratio}");
        }
    }
}
