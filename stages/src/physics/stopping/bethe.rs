//! Electronic stopping at high energy: the Bethe formula with the shell correction, for
//! an ion of effective charge from the Pierce–Blann rule.

use super::material::Component;
use super::Ion;
use crate::physics::constants::{AVOGADRO_PER_MOL, ELECTRON_MASS_MEV, FINE_STRUCTURE, HBAR_C_MEV_FM};

/// K = 4π N_A r_e² m_e c² in MeV cm²/mol, with r_e = α ħc/(m_e c²) the classical electron
/// radius; from the CODATA 2018 constants (PDG Review of Particle Physics, "Passage of
/// particles through matter", Table 34.1 gives 0.307075 MeV cm²/mol).
pub fn bethe_k_mev_cm2_mol() -> f64 {
    let r_e_cm = FINE_STRUCTURE * HBAR_C_MEV_FM / ELECTRON_MASS_MEV * 1e-13;
    4.0 * std::f64::consts::PI * AVOGADRO_PER_MOL * r_e_cm * r_e_cm * ELECTRON_MASS_MEV
}

/// Mean charge of an ion of proton number Z₁ moving at β through matter, as a fraction of
/// Z₁:
///     q/Z₁ = 1 − exp(−0.95 v_r),   v_r = v/(v₀ Z₁^(2/3)),   v₀ = α c
/// Source: E. Pierce, M. Blann, Phys. Rev. 173 (1968) 390 (from memory); a fit to
/// equilibrium charge states of heavy ions in solids, good to about 5 % in q for
/// v_r > 0.3. Protons are given q = 1 (their stopping is the reference the rule scales).
pub fn effective_charge(z: u32, beta: f64) -> f64 {
    if z <= 1 {
        return f64::from(z);
    }
    let z_f = f64::from(z);
    let v_r = beta / FINE_STRUCTURE / z_f.powf(2.0 / 3.0);
    z_f * (1.0 - (-0.95 * v_r).exp())
}

/// Smallest η = βγ at which the shell-correction fit of [`shell_correction`] holds.
pub const SHELL_FIT_MIN_ETA: f64 = 0.13;

/// Shell correction C of the Bethe formula (enters as −C/Z₂ in the stopping number):
///     C(I, η) = (0.422377 η⁻² + 0.0304043 η⁻⁴ − 0.00038106 η⁻⁶) × 10⁻⁶ I²
///             + (3.858019 η⁻² − 0.1667989 η⁻⁴ + 0.00157955 η⁻⁶) × 10⁻⁹ I³
/// with η = βγ and I in eV. Source: the fit of W. H. Barkas, M. J. Berger, NASA SP-3013
/// (1964), as quoted in W. R. Leo, Techniques for Nuclear and Particle Physics Experiments
/// (Springer 1994), Eq. (2.33) (coefficients from memory). It holds for η ≥ 0.13 (about
/// 7.9 MeV/u); below that the polynomial in 1/η diverges, so it is held at its value at
/// η = 0.13, a choice of ours whose effect is part of the deviations in [`super::low_energy`].
pub fn shell_correction(mean_excitation_ev: f64, eta: f64) -> f64 {
    let e2 = eta.max(SHELL_FIT_MIN_ETA).powi(-2);
    let (e4, e6) = (e2 * e2, e2 * e2 * e2);
    let i = mean_excitation_ev;
    (0.422_377 * e2 + 0.030_404_3 * e4 - 0.000_381_06 * e6) * 1e-6 * i * i
        + (3.858_019 * e2 - 0.166_798_9 * e4 + 0.001_579_55 * e6) * 1e-9 * i * i * i
}

/// Electronic mass stopping power of element `target` for `ion` at kinetic energy
/// `energy_mev`, in MeV cm²/g, by the Bethe formula
///     S = K q² (Z₂/A₂) (1/β²) [½ ln(2 m_e c² β²γ² W_max / I²) − β² − C/Z₂]
///     W_max = 2 m_e c² β²γ² / (1 + 2γ m_e/M + (m_e/M)²)
/// K from [`bethe_k_mev_cm2_mol`], q the effective charge ([`effective_charge`]), Z₂ and
/// A₂ (g/mol) of the target element, I its mean excitation energy, M the ion's mass, C the
/// shell correction ([`shell_correction`]). Source: PDG Review of Particle Physics,
/// "Passage of particles through matter", Eqs. (34.4)–(34.5); H. Bethe, Ann. Phys. 5
/// (1930) 325.
///
/// Left out: the density effect (below 1 % up to [`super::MAX_ENERGY_MEV_PER_U`]), and
/// the Barkas (∝ q³) and Bloch (∝ q⁴) terms. These two have opposite signs and largely
/// cancel: for 58Ni in Ni at 10 MeV/u the Bloch term alone lowers S by about 20 % and
/// the omission of both changes S by about 2 % against pycatima 1.982 (which has both),
/// measured; 1H–16O agree within 3.3 % above 2 MeV/u (tests/stopping.rs).
///
/// Holds for β well above the target's K-shell electron velocities: above about 1 MeV/u
/// in light targets and 5 MeV/u in heavy ones (see [`super::low_energy`] below).
pub fn electronic_mev_cm2_g(ion: &Ion, target: &Component, energy_mev: f64) -> f64 {
    let (beta2, gamma) = ion.beta2_gamma(energy_mev);
    let q = effective_charge(ion.z, beta2.sqrt());
    let z2 = f64::from(target.z);
    let i_mev = target.mean_excitation_ev * 1e-6;
    let mass_ratio = ELECTRON_MASS_MEV / ion.mass_mev;
    let two_mc2_b2g2 = 2.0 * ELECTRON_MASS_MEV * beta2 * gamma * gamma;
    let w_max_mev = two_mc2_b2g2 / (1.0 + 2.0 * gamma * mass_ratio + mass_ratio * mass_ratio);
    let stopping_number = 0.5 * (two_mc2_b2g2 * w_max_mev / (i_mev * i_mev)).ln()
        - beta2
        - shell_correction(target.mean_excitation_ev, beta2.sqrt() * gamma) / z2;
    bethe_k_mev_cm2_mol() * q * q * z2 / (target.molar_mass_g_mol * beta2) * stopping_number
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::physics::constants::ATOMIC_MASS_UNIT_MEV;
    use crate::physics::stopping::material::Material;
    use approx::assert_relative_eq;

    #[test]
    fn bethe_constant_matches_the_pdg_value() {
        // PDG Table 34.1: K = 0.307075 MeV cm²/mol (from memory); its 6 digits.
        assert_relative_eq!(bethe_k_mev_cm2_mol(), 0.307_075, max_relative = 2e-6);
    }

    #[test]
    fn effective_charge_tends_to_the_bare_charge_and_falls_at_low_speed() {
        // (Z, β, q/Z): values of the closed form 1 − exp(−0.95 β/(α Z^(2/3))), by hand.
        let cases = [(1, 0.01, 1.0), (2, 0.3, 1.0 - (-0.95 * 0.3 * 137.035_999_084 / 2f64.powf(2.0 / 3.0)).exp())];
        for (z, beta, fraction) in cases {
            assert_relative_eq!(effective_charge(z, beta) / f64::from(z), fraction, max_relative = 1e-12);
        }
        // 58Ni at 10 MeV/u: v/v₀ = 20.0, v_r = 2.17, q/Z = 0.873 (hand calculation).
        let beta = (1.0 - (1.0 + 10.0 / ATOMIC_MASS_UNIT_MEV).powi(-2)).sqrt();
        assert_relative_eq!(effective_charge(28, beta) / 28.0, 0.873, max_relative = 2e-3);
    }

    #[test]
    fn shell_correction_is_held_below_its_fit_range() {
        // Below η = 0.13 the fit is held at its edge value; above, it falls as η grows.
        let i = 311.0;
        assert_relative_eq!(shell_correction(i, 0.05), shell_correction(i, SHELL_FIT_MIN_ETA));
        assert!(shell_correction(i, 0.2) < shell_correction(i, 0.13));
        assert!(shell_correction(i, 1.0) < shell_correction(i, 0.2));
    }

    #[test]
    fn proton_stopping_matches_icru_49_above_a_few_mev() {
        // ICRU Report 49 (1993) proton electronic stopping powers in aluminium, values from
        // memory rounded to 3 digits: 10 MeV 33.9, 100 MeV 5.68 MeV cm²/g. Tolerance 3 %:
        // the formula leaves out the Barkas and Bloch terms (about 1 % for protons here).
        let proton = Ion { z: 1, mass_mev: 938.272_088 };
        let al = &Material::parse("Al").expect("Al").components[0];
        for (energy_mev, icru) in [(10.0, 33.9), (100.0, 5.68)] {
            assert_relative_eq!(electronic_mev_cm2_g(&proton, al, energy_mev), icru, max_relative = 0.03);
        }
    }
}
