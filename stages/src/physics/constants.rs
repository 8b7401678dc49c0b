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
