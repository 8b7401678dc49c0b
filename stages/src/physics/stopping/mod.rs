//! Stopping of ions in matter: electronic and nuclear stopping powers, range, energy loss
//! through a layer and its straggling, for any ion in any element, compound (Bragg
//! additivity) or stack of layers.
//!
//! Split by concern: [`bethe`] (electronic stopping at high energy), [`low_energy`]
//! (electronic stopping below 1 MeV/u), [`nuclear`] (ZBL universal nuclear stopping),
//! [`material`] (elements, mean excitation energies, formulas, Bragg additivity),
//! [`integrate`] (range and energy loss by integrating dE/dx), [`straggling`] (Bohr with the
//! Lindhard–Scharff correction).
//!
//! Units: energies in MeV (kinetic, whole ion), energies per nucleon in MeV/u (kinetic
//! energy over the ion's mass in u), mass stopping powers in MeV cm²/g, areal densities in
//! g/cm² inside the physics and µg/cm² or mg/cm² at the interface.
//!
//! Range of validity (measured against pycatima 1.982 by
//! `tests/reference/generate_stopping.py`; see the tests in `tests/stopping.rs`): from
//! [`MIN_ENERGY_MEV_PER_U`] to [`MAX_ENERGY_MEV_PER_U`]; within a few per cent for
//! 1H–16O above [`ACCURATE_ENERGY_MEV_PER_U`] in targets up to Z = 30, and for heavy ions
//! and heavy targets above 5 MeV/u. Below that the low-energy form is an interpolation
//! whose errors reach tens of per cent (figures in [`low_energy`]).

pub mod bethe;
pub mod integrate;
pub mod low_energy;
pub mod material;
pub mod nuclear;
pub mod straggling;

use super::constants::ATOMIC_MASS_UNIT_MEV;
pub use material::{Component, Material, MaterialError};

/// Lowest energy per nucleon the model accepts, MeV/u. Below it the electronic part has no
/// support at all and nuclear stopping dominates for heavy ions.
pub const MIN_ENERGY_MEV_PER_U: f64 = 0.01;

/// Highest energy per nucleon the model accepts, MeV/u: above it the density effect (left
/// out of [`bethe`]) exceeds about 1 % in heavy targets and radiative losses of the
/// projectile start to matter.
pub const MAX_ENERGY_MEV_PER_U: f64 = 500.0;

/// Energy per nucleon from which the stopping powers agree with pycatima within a few per
/// cent in targets up to Z = 30 (see the module comment); below it a warning is due.
pub const ACCURATE_ENERGY_MEV_PER_U: f64 = 2.0;

/// A fully stripped or partly dressed ion moving through matter.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Ion {
    /// Proton number Z₁.
    pub z: u32,
    /// Nuclear mass in MeV.
    pub mass_mev: f64,
}

impl Ion {
    /// The ion of proton number `z` and mass `mass_u` in u.
    pub fn from_mass_u(z: u32, mass_u: f64) -> Ion {
        Ion { z, mass_mev: mass_u * ATOMIC_MASS_UNIT_MEV }
    }

    /// Mass in u.
    pub fn mass_u(&self) -> f64 {
        self.mass_mev / ATOMIC_MASS_UNIT_MEV
    }

    /// Kinetic energy per nucleon (per u of mass) in MeV/u of an ion of kinetic energy
    /// `energy_mev`.
    pub fn energy_mev_per_u(&self, energy_mev: f64) -> f64 {
        energy_mev / self.mass_u()
    }

    /// β² and γ of the ion at kinetic energy `energy_mev`: γ = 1 + T/(M c²),
    /// β² = 1 − 1/γ² (special relativity; common practice).
    pub fn beta2_gamma(&self, energy_mev: f64) -> (f64, f64) {
        let gamma = 1.0 + energy_mev / self.mass_mev;
        (1.0 - 1.0 / (gamma * gamma), gamma)
    }
}

/// The stopping power of a material for an ion, in MeV cm²/g.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct StoppingPower {
    /// Electronic stopping, MeV cm²/g.
    pub electronic_mev_cm2_g: f64,
    /// Nuclear stopping, MeV cm²/g.
    pub nuclear_mev_cm2_g: f64,
}

impl StoppingPower {
    /// Electronic plus nuclear, MeV cm²/g.
    pub fn total_mev_cm2_g(&self) -> f64 {
        self.electronic_mev_cm2_g + self.nuclear_mev_cm2_g
    }
}

/// An energy outside the range where the model holds, or an ion that does not get through.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum StoppingError {
    /// The energy per nucleon is outside [`MIN_ENERGY_MEV_PER_U`, `MAX_ENERGY_MEV_PER_U`].
    #[error("{energy_mev} MeV ({energy_mev_per_u:.4} MeV/u) is outside the range of the stopping model, {MIN_ENERGY_MEV_PER_U} to {MAX_ENERGY_MEV_PER_U} MeV/u")]
    OutsideValidity {
        /// Kinetic energy, MeV.
        energy_mev: f64,
        /// The same per nucleon, MeV/u.
        energy_mev_per_u: f64,
    },
    /// A thickness or energy that is not a positive finite number.
    #[error("{quantity} must be a positive finite number, found {value}")]
    NotPositive {
        /// What it is, with its unit.
        quantity: &'static str,
        /// The value found.
        value: f64,
    },
    /// The ion stops inside the layer: its range is shorter than the layer.
    #[error("the ion stops inside the layer: its range is {range_ug_cm2:.4} µg/cm², the layer is {thickness_ug_cm2:.4} µg/cm² thick")]
    StopsInside {
        /// The ion's range in the material, µg/cm².
        range_ug_cm2: f64,
        /// The layer's areal density, µg/cm².
        thickness_ug_cm2: f64,
    },
}

/// Check that `energy_mev` lies in the model's range for `ion`.
///
/// # Errors
/// [`StoppingError::NotPositive`] for a non-positive or non-finite energy,
/// [`StoppingError::OutsideValidity`] outside [`MIN_ENERGY_MEV_PER_U`, `MAX_ENERGY_MEV_PER_U`].
pub fn check_energy(ion: &Ion, energy_mev: f64) -> Result<(), StoppingError> {
    if !(energy_mev.is_finite() && energy_mev > 0.0) {
        return Err(StoppingError::NotPositive { quantity: "energy (MeV)", value: energy_mev });
    }
    let energy_mev_per_u = ion.energy_mev_per_u(energy_mev);
    if !(MIN_ENERGY_MEV_PER_U..=MAX_ENERGY_MEV_PER_U).contains(&energy_mev_per_u) {
        return Err(StoppingError::OutsideValidity { energy_mev, energy_mev_per_u });
    }
    Ok(())
}

/// Electronic and nuclear stopping power of `material` for `ion` at kinetic energy
/// `energy_mev`, in MeV cm²/g, by Bragg additivity over the material's elements
/// ([`material::Material::bragg_sum`]): electronic from [`low_energy::electronic_mev_cm2_g`]
/// (which switches to [`bethe`] above 1 MeV/u), nuclear from [`nuclear::nuclear_mev_cm2_g`].
/// No range check: callers check with [`check_energy`] where the user chose the energy.
pub fn stopping_power(ion: &Ion, material: &Material, energy_mev: f64) -> StoppingPower {
    StoppingPower {
        electronic_mev_cm2_g: material.bragg_sum(|c| low_energy::electronic_mev_cm2_g(ion, c, energy_mev)),
        nuclear_mev_cm2_g: material.bragg_sum(|c| nuclear::nuclear_mev_cm2_g(ion, c, energy_mev)),
    }
}

/// Total (electronic + nuclear) stopping power in MeV cm²/g, see [`stopping_power`].
pub fn total_mev_cm2_g(ion: &Ion, material: &Material, energy_mev: f64) -> f64 {
    stopping_power(ion, material, energy_mev).total_mev_cm2_g()
}
