//! Physical constants, CODATA 2018 recommended values (E. Tiesinga et al., Rev. Mod. Phys.
//! 93 (2021) 025010). The SI defining constants are exact.

/// Elementary charge e in C (exact since the 2019 SI redefinition).
pub const ELEMENTARY_CHARGE_C: f64 = 1.602_176_634e-19;

/// Avogadro constant N_A in 1/mol (exact since the 2019 SI redefinition).
pub const AVOGADRO_PER_MOL: f64 = 6.022_140_76e23;

/// Millibarn per cm²: 1 b = 1e-24 cm², so 1 mb = 1e-27 cm² (definition of the barn).
pub const MB_PER_CM2: f64 = 1e27;

/// Steradian per millisteradian.
pub const SR_PER_MSR: f64 = 1e-3;

/// Atomic mass constant (unified atomic mass unit) m_u c² in MeV (CODATA 2018).
pub const ATOMIC_MASS_UNIT_MEV: f64 = 931.494_102_42;

/// Electron mass m_e c² in MeV (CODATA 2018).
pub const ELECTRON_MASS_MEV: f64 = 0.510_998_950_00;

/// Reduced Planck constant times the speed of light, ħc, in MeV fm (CODATA 2018).
pub const HBAR_C_MEV_FM: f64 = 197.326_980_4;

/// Fine-structure constant α (CODATA 2018: 1/α = 137.035999084).
pub const FINE_STRUCTURE: f64 = 1.0 / 137.035_999_084;

/// Millibarn per fm²: 1 fm² = 1e-26 cm² = 10 mb.
pub const MB_PER_FM2: f64 = 10.0;

/// Charged-pion mass m_π± c² in MeV (Particle Data Group, P. A. Zyla et al., Prog. Theor.
/// Exp. Phys. 2020 (2020) 083C01: 139.57039 ± 0.00018 MeV).
pub const CHARGED_PION_MASS_MEV: f64 = 139.570_39;
