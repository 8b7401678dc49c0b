//! `xsflow stopping`: stopping power, range, and for a layer the energy loss, exit energy
//! and straggling of an ion in a material, for a person (aligned lines) or a script (JSON).

use std::fmt::Write as _;

use serde::Serialize;
use stages::physics::nuclide;
use stages::physics::stopping::{
    check_energy, integrate, stopping_power, straggling, Ion, Material, StoppingError, ACCURATE_ENERGY_MEV_PER_U,
};

/// Stopping of one ion at one energy, and through one layer when a thickness is given.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct StoppingResult {
    /// The ion, as named.
    pub ion: String,
    /// The material, as written.
    pub material: String,
    /// Kinetic energy entering, MeV.
    pub energy_mev: f64,
    /// The same per u of the ion's mass, MeV/u.
    pub energy_mev_per_u: f64,
    /// Electronic stopping power, MeV cm²/g.
    pub stopping_electronic_mev_cm2_g: f64,
    /// Nuclear stopping power, MeV cm²/g.
    pub stopping_nuclear_mev_cm2_g: f64,
    /// Total stopping power, MeV cm²/g.
    pub stopping_total_mev_cm2_g: f64,
    /// Total stopping power, keV/(µg/cm²).
    pub stopping_total_kev_per_ug_cm2: f64,
    /// Range (continuous slowing down), mg/cm².
    pub range_mg_cm2: f64,
    /// The layer's areal density, µg/cm², when one was given.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub thickness_ug_cm2: Option<f64>,
    /// Energy lost in the layer, MeV.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub energy_loss_mev: Option<f64>,
    /// Mean energy leaving the layer, MeV.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub energy_out_mev: Option<f64>,
    /// Standard deviation of the energy leaving the layer, MeV.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub straggling_mev: Option<f64>,
    /// True when the ion stops inside the layer (its range is shorter than the layer).
    #[serde(skip_serializing_if = "std::ops::Not::not")]
    pub stops_inside: bool,
}

/// The ion named `name` (charged: Z ≥ 1).
fn ion(name: &str) -> Result<(Ion, String), String> {
    let n = nuclide::parse(name).map_err(|e| format!("--ion: {e}"))?;
    if n.z == 0 {
        return Err(format!("--ion {name}: a neutron has no charge and loses no energy by ionisation; name a charged ion (p, 4He, 16O, ...)"));
    }
    Ok((Ion { z: n.z, mass_mev: n.nuclear_mass_mev() }, n.name()))
}

/// Compute what `xsflow stopping` prints, with its warnings.
///
/// # Errors
/// One line per problem, naming the flag, the value and what is accepted.
pub fn compute(
    ion_name: &str,
    material_name: &str,
    energy_mev: f64,
    thickness_ug_cm2: Option<f64>,
) -> Result<(StoppingResult, Vec<String>), Vec<String>> {
    let mut problems = Vec::new();
    let ion = ion(ion_name).map_err(|e| problems.push(e)).ok();
    let material = Material::parse(material_name).map_err(|e| problems.push(format!("--material: {e}"))).ok();
    if let Some(t) = thickness_ug_cm2.filter(|t| !(t.is_finite() && *t > 0.0)) {
        problems.push(format!("--thickness-ug-cm2: found {t}, expected a positive areal density in µg/cm²"));
    }
    if let Some((ion, _)) = &ion {
        if let Err(e) = check_energy(ion, energy_mev) {
            problems.push(format!("--energy-mev: {e}"));
        }
    }
    let (Some((ion, ion_label)), Some(material), true) = (ion, material, problems.is_empty()) else {
        return Err(problems);
    };
    let mut warnings = Vec::new();
    let per_u = ion.energy_mev_per_u(energy_mev);
    let below_accurate = |e: f64, what: &str| {
        format!(
            "{what} {e:.4} MeV/u is below {ACCURATE_ENERGY_MEV_PER_U} MeV/u, where the electronic stopping is a \
             low-energy interpolation (errors of tens of per cent; see the README)"
        )
    };
    if per_u < ACCURATE_ENERGY_MEV_PER_U {
        warnings.push(below_accurate(per_u, "the energy"));
    }
    let s = stopping_power(&ion, &material, energy_mev);
    let range_g_cm2 = integrate::range_g_cm2(&ion, &material, energy_mev);
    let mut result = StoppingResult {
        ion: ion_label,
        material: material.name.clone(),
        energy_mev,
        energy_mev_per_u: per_u,
        stopping_electronic_mev_cm2_g: s.electronic_mev_cm2_g,
        stopping_nuclear_mev_cm2_g: s.nuclear_mev_cm2_g,
        stopping_total_mev_cm2_g: s.total_mev_cm2_g(),
        stopping_total_kev_per_ug_cm2: s.total_mev_cm2_g() * 1e-3,
        range_mg_cm2: range_g_cm2 * 1e3,
        thickness_ug_cm2,
        energy_loss_mev: None,
        energy_out_mev: None,
        straggling_mev: None,
        stops_inside: false,
    };
    if let Some(t_ug) = thickness_ug_cm2 {
        match integrate::energy_out_mev(&ion, &material, energy_mev, t_ug * 1e-6) {
            Ok(out) => {
                if ion.energy_mev_per_u(out) < ACCURATE_ENERGY_MEV_PER_U && per_u >= ACCURATE_ENERGY_MEV_PER_U {
                    warnings.push(below_accurate(ion.energy_mev_per_u(out), "the exit energy"));
                }
                result.energy_loss_mev = Some(energy_mev - out);
                result.energy_out_mev = Some(out);
                result.straggling_mev = Some(straggling::straggling_mev(&ion, &material, energy_mev, out, 0.0));
            }
            Err(e @ StoppingError::StopsInside { .. }) => {
                result.stops_inside = true;
                warnings.push(format!("{e}; no exit energy"));
            }
            Err(e) => return Err(vec![e.to_string()]),
        }
    }
    Ok((result, warnings))
}

/// The result as JSON (one object) or as aligned lines.
pub fn render(result: &StoppingResult, json: bool) -> String {
    if json {
        return serde_json::to_string_pretty(result).unwrap_or_else(|e| format!("{{\"error\": \"{e}\"}}")) + "\n";
    }
    let mut s = String::new();
    let _ = writeln!(
        s,
        "{} in {} at {} MeV ({:.4} MeV/u)",
        result.ion, result.material, result.energy_mev, result.energy_mev_per_u
    );
    let mut line = |name: &str, value: f64, unit: &str| {
        let _ = writeln!(s, "  {name:<22} {value:>14.6} {unit}");
    };
    line("stopping, electronic", result.stopping_electronic_mev_cm2_g, "MeV cm²/g");
    line("stopping, nuclear", result.stopping_nuclear_mev_cm2_g, "MeV cm²/g");
    line("stopping, total", result.stopping_total_mev_cm2_g, "MeV cm²/g");
    line("", result.stopping_total_kev_per_ug_cm2, "keV/(µg/cm²)");
    line("range", result.range_mg_cm2, "mg/cm²");
    if let Some(t) = result.thickness_ug_cm2 {
        line("layer", t, "µg/cm²");
    }
    for (name, value) in [
        ("energy loss", result.energy_loss_mev),
        ("exit energy", result.energy_out_mev),
        ("straggling (1σ)", result.straggling_mev),
    ] {
        if let Some(v) = value {
            line(name, v, "MeV");
        }
    }
    if result.stops_inside {
        let _ = writeln!(s, "  the ion stops inside the layer (range above)");
    }
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn bad_requests_name_the_flag_and_what_is_accepted() {
        // (ion, material, energy MeV, thickness µg/cm², what one problem line contains)
        let cases = [
            ("4Hx", "Ni", 24.0, None, "--ion: unknown nuclide `4Hx`"),
            ("n", "Ni", 24.0, None, "a neutron has no charge"),
            ("4He", "Nx", 24.0, None, "--material: material `Nx`: `Nx` is not an element symbol"),
            ("4He", "Ni", -1.0, None, "--energy-mev: energy (MeV) must be a positive finite number, found -1"),
            ("4He", "Ni", 0.0, None, "--energy-mev: energy (MeV) must be a positive finite number, found 0"),
            ("4He", "Ni", 1e4, None, "outside the range of the stopping model, 0.01 to 500 MeV/u"),
            ("4He", "Ni", 24.0, Some(0.0), "--thickness-ug-cm2: found 0, expected a positive areal density"),
            ("4He", "Ni", 24.0, Some(-5.0), "--thickness-ug-cm2: found -5"),
        ];
        for (ion, material, energy, thickness, message) in cases {
            let problems = compute(ion, material, energy, thickness).expect_err(message);
            assert!(problems.iter().any(|p| p.contains(message)), "{message}: {problems:?}");
        }
    }

    #[test]
    fn a_thick_layer_reports_the_range_instead() {
        let (result, warnings) = compute("4He", "Au", 5.0, Some(1e6)).expect("valid request");
        assert!(result.stops_inside && result.energy_out_mev.is_none());
        assert!(warnings.iter().any(|w| w.contains("stops inside the layer: its range is")), "{warnings:?}");
        assert!(render(&result, false).contains("stops inside"));
    }
}
