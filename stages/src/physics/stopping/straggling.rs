//! Energy straggling: the spread of the energy of ions that crossed the same layer.

use super::bethe::effective_charge;
use super::integrate::gauss_legendre;
use super::{total_mev_cm2_g, Ion, Material};
use crate::physics::constants::{AVOGADRO_PER_MOL, FINE_STRUCTURE, HBAR_C_MEV_FM};

/// Lindhard–Scharff factor of the Bohr variance, as a function of χ = v²/(v₀² Z₂):
///     Ω²/Ω_B² = L(χ)/2,   L(χ) = 1.36 χ^(1/2) − 0.016 χ^(3/2)   (χ ≤ 3),   1 (χ > 3)
/// Source: J. Lindhard, M. Scharff, Mat. Fys. Medd. Dan. Vid. Selsk. 27, no. 15 (1953)
/// (from memory, as quoted by W. K. Chu, Phys. Rev. A 13 (1976) 2057). The published
/// form jumps from 1.136 to 1 at χ = 3; we cap it at 1 (the Bohr value it tends to), which
/// removes the jump.
pub fn lindhard_scharff_factor(chi: f64) -> f64 {
    if chi >= 3.0 {
        return 1.0;
    }
    (0.5 * (1.36 * chi.sqrt() - 0.016 * chi.powf(1.5))).min(1.0)
}

/// Growth of the energy variance per unit areal density of `material`, in MeV²/(g/cm²),
/// for `ion` at kinetic energy `energy_mev`:
///     dΩ²/d(ρx) = 4π (q e²)² Σ_i w_i Z₂ᵢ (N_A/A₂ᵢ) · LS(χᵢ) · γ²(1 − β²/2)
/// Bohr's variance (N. Bohr, Phil. Mag. 30 (1915) 581) with e² = α ħc, q the effective
/// charge ([`effective_charge`]), the Lindhard–Scharff factor
/// ([`lindhard_scharff_factor`]) and the relativistic factor γ²(1 − β²/2) of the
/// free-electron variance ξ W_max (1 − β²/2) (PDG Review of Particle Physics, "Passage of
/// particles through matter", from memory).
pub fn variance_rate_mev2_cm2_g(ion: &Ion, material: &Material, energy_mev: f64) -> f64 {
    let (beta2, gamma) = ion.beta2_gamma(energy_mev);
    let q = effective_charge(ion.z, beta2.sqrt());
    let e2_mev_cm = FINE_STRUCTURE * HBAR_C_MEV_FM * 1e-13;
    let bohr_per_electron = 4.0 * std::f64::consts::PI * (q * e2_mev_cm).powi(2);
    let electrons = material.bragg_sum(|c| {
        let z2 = f64::from(c.z);
        let chi = beta2 / (FINE_STRUCTURE * FINE_STRUCTURE * z2);
        z2 * AVOGADRO_PER_MOL / c.molar_mass_g_mol * lindhard_scharff_factor(chi)
    });
    bohr_per_electron * electrons * gamma * gamma * (1.0 - 0.5 * beta2)
}

/// Standard deviation in MeV of the energy of ions leaving a layer with mean energy
/// `energy_out_mev`, having entered it with mean `energy_in_mev` and standard deviation
/// `sigma_in_mev`:
///     σ_out² = σ_in² (S(E_out)/S(E_in))² + S(E_out)² ∫_{E_out}^{E_in} (dΩ²/dρx)/S³ dE
/// (each slice's variance carried to the exit by the ratio of stopping powers, the
/// transport of a narrow energy distribution through a thick layer: C. Tschalär, Nucl.
/// Instrum. Methods 61 (1968) 141; M. G. Payne, Phys. Rev. 185 (1969) 611; from memory).
/// Holds while σ stays small against the energy; by 8-point Gauss–Legendre on the
/// energy interval split in 16 panels (straggling needs no more than a few per cent).
pub fn straggling_mev(
    ion: &Ion,
    material: &Material,
    energy_in_mev: f64,
    energy_out_mev: f64,
    sigma_in_mev: f64,
) -> f64 {
    let s_out = total_mev_cm2_g(ion, material, energy_out_mev);
    let s_in = total_mev_cm2_g(ion, material, energy_in_mev);
    let growth = |e: f64| variance_rate_mev2_cm2_g(ion, material, e) / total_mev_cm2_g(ion, material, e).powi(3);
    // ∫ (dΩ²/dρx)/S² dρx over the layer, with dρx = dE/S.
    let integral = gauss_legendre(growth, energy_out_mev, energy_in_mev, 16);
    (sigma_in_mev.powi(2) * (s_out / s_in).powi(2) + s_out * s_out * integral).sqrt()
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn lindhard_scharff_factor_rises_to_the_bohr_value() {
        // (χ, factor): the closed form by hand, 1e-9; capped at 1 from χ ≈ 2.3 on.
        for (chi, factor) in [(0.25, 0.5 * (1.36 * 0.5 - 0.016 * 0.125)), (1.0, 0.672), (3.0, 1.0), (100.0, 1.0)] {
            assert_relative_eq!(lindhard_scharff_factor(chi), factor, max_relative = 1e-9);
        }
    }

    #[test]
    fn thin_layer_straggling_is_bohr_straggling() {
        // Fast protons (χ > 3, LS factor 1) through 1 mg/cm² of carbon: σ² equals the
        // Bohr variance 4π e⁴ Z₂ N t γ²(1 − β²/2) to 1 % (the thin-layer limit of the
        // transport formula; S changes by < 0.1 % over the layer). Bohr's formula by hand:
        // 4π (1.439964e-13 MeV cm)² · 6 · 6.02214e23/12.0107 · 1e-3 g/cm².
        let proton = Ion::from_mass_u(1, 1.007_276);
        let carbon = Material::parse("C").expect("C");
        let energy_in = 100.0;
        let t = 1e-3;
        let out = super::super::integrate::energy_out_mev(&proton, &carbon, energy_in, t).expect("through");
        let sigma = straggling_mev(&proton, &carbon, energy_in, out, 0.0);
        let (beta2, gamma) = proton.beta2_gamma(energy_in);
        let bohr = 4.0 * std::f64::consts::PI * 1.439_964e-13_f64.powi(2) * 6.0 * 6.022_14e23 / 12.0107 * t;
        assert_relative_eq!(sigma * sigma, bohr * gamma * gamma * (1.0 - 0.5 * beta2), max_relative = 0.01);
    }
}
