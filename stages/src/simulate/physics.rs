//! The expected counts of a simulated run, from first principles and written apart from the
//! reduction's own formulas (so that a closure test checks them): luminosity per coulomb,
//! solid angle, detection efficiency, the true live fraction of a dead-time model at a
//! true rate, and a Gaussian peak spread over ADC channels.

use crate::physics::constants::{AVOGADRO_PER_MOL, ELEMENTARY_CHARGE_C};
use crate::physics::interpolate;
use crate::physics::peak_acceptance::normal_cdf;
use crate::physics::PhysicsError;
use crate::raw::CalibrationConfig;
use crate::setup::{ApertureConfig, DetectorConfig, TargetConfig};

use super::DeadTimeModel;

/// Square centimetres per millibarn: 1 b = 1e-24 cm² (definition of the barn).
const CM2_PER_MB: f64 = 1e-27;

/// Integrated luminosity per coulomb of beam charge, in 1/(cm² C):
///     L/Q = n_t / (q e),   n_t = ρx f N_A / (M cos α)
/// q e: charge of one beam ion at the collector (q its charge state, e the elementary
/// charge, CODATA 2018); ρx: areal density in g/cm² along the foil normal; f: atom fraction
/// of the scattering isotope; N_A: Avogadro constant (CODATA 2018); M: molar mass in g/mol;
/// α: tilt of the foil normal to the beam (the beam's path through the foil is ρx/cos α).
/// Holds for a thin, uniform foil and a Faraday cup that sees every ion at charge state q
/// (common practice; W. R. Leo, Techniques for Nuclear and Particle Physics Experiments,
/// 2nd ed. (1994), section 2.2 for the luminosity of a fixed target, from memory).
/// `None` when the target section gives no areal density.
pub fn luminosity_per_cm2_per_c(charge_state: u32, target: &TargetConfig) -> Option<f64> {
    let atoms_per_cm2 = target.areal_density_g_cm2()? * target.isotopic_fraction * AVOGADRO_PER_MOL
        / (target.molar_mass_g_mol * target.tilt_deg.to_radians().cos());
    Some(atoms_per_cm2 / (f64::from(charge_state) * ELEMENTARY_CHARGE_C))
}

/// Solid angle in sr of a detector's defining aperture seen from the target centre:
/// - circle of radius r at distance d: Ω = 2π (1 − cos β), cos β = d/√(d² + r²), β the
///   half-angle of the cone (the solid angle of a cone; any text, e.g. G. F. Knoll,
///   Radiation Detection and Measurement, 4th ed. (2010), ch. 4);
/// - rectangle of half-sides a, b at distance d: Ω = 4 arcsin(a b / √((a² + d²)(b² + d²)))
///   (H. Gotoh, H. Yagi, Nucl. Instrum. Methods 96 (1971) 485);
/// - given: the measured value.
///
/// `None` when a circle or rectangle has no distance (the set-up's checks refuse that).
pub fn solid_angle_sr(detector: &DetectorConfig) -> Option<f64> {
    match detector.aperture {
        ApertureConfig::Given { solid_angle_msr, .. } => Some(solid_angle_msr * 1e-3),
        ApertureConfig::Circle { radius_mm, .. } => {
            let d = detector.distance_mm?;
            let cos_half_angle = d / (d * d + radius_mm * radius_mm).sqrt();
            Some(2.0 * std::f64::consts::PI * (1.0 - cos_half_angle))
        }
        ApertureConfig::Rectangle { half_width_mm: a, half_height_mm: b, .. } => {
            let d = detector.distance_mm?;
            Some(4.0 * (a * b / ((a * a + d * d) * (b * b + d * d)).sqrt()).asin())
        }
    }
}

/// Detection efficiency of a detector for a particle of lab energy E: the constant, or the
/// table interpolated linearly at E (the table is the definition; no extrapolation).
///
/// # Errors
/// [`PhysicsError::OutsideTable`] when E lies outside the table.
pub fn efficiency(detector: &DetectorConfig, energy_lab_mev: f64) -> Result<f64, PhysicsError> {
    match &detector.efficiency_table {
        None => Ok(detector.efficiency),
        Some(t) => interpolate::linear(&t.energy_lab_mev, &t.efficiency, energy_lab_mev, "energy_lab_mev"),
    }
}

/// Fraction of the arriving events that a counting system with resolving time τ records
/// at a true (arrival) rate n, for events arriving at random:
/// - non-paralyzable: recorded rate m = n/(1 + nτ), so f = m/n = 1/(1 + nτ);
/// - paralyzable: m = n e^(−nτ), so f = e^(−nτ).
///
/// n in 1/s, τ in s. Source: G. F. Knoll, Radiation Detection and Measurement, 4th ed.
/// (2010), ch. 4, section VII, Eqs. (4.23) and (4.24) (equation numbers from memory).
pub fn live_fraction(model: DeadTimeModel, true_rate_per_s: f64, resolving_time_s: f64) -> f64 {
    let n_tau = true_rate_per_s * resolving_time_s;
    match model {
        DeadTimeModel::NonParalyzable => 1.0 / (1.0 + n_tau),
        DeadTimeModel::Paralyzable => (-n_tau).exp(),
    }
}

/// Expected counts of a peak per unit integrated luminosity (per 1/cm²), before dead time:
///     N/L = (dσ/dΩ)_lab ΔΩ ε
/// with dσ/dΩ in mb/sr (1 mb = 1e-27 cm²), ΔΩ in sr and ε the efficiency; holds for a
/// solid angle small enough that the cross section is constant over it (common practice).
pub fn counts_per_luminosity_cm2(dsdo_lab_mb_sr: f64, solid_angle_sr: f64, efficiency: f64) -> f64 {
    dsdo_lab_mb_sr * CM2_PER_MB * solid_angle_sr * efficiency
}

/// Half width, in standard deviations, beyond which a Gaussian peak puts nothing worth a
/// channel: the mass beyond 12 σ is below 1e-32 (Abramowitz & Stegun 26.2.12).
const PEAK_REACH_SIGMAS: f64 = 12.0;

/// Add a Gaussian peak of `counts` expected counts at `energy_mev` with standard deviation
/// `sigma_mev` to the expected counts per channel `means` of one detector: channel c holds
/// the energies [E(c − ½), E(c + ½)) of the calibration E(c), so it gets
///     counts · (Φ((E(c + ½) − μ)/σ) − Φ((E(c − ½) − μ)/σ))
/// with Φ the standard normal distribution function (Abramowitz & Stegun 26.2.2). Returns
/// the expected counts that fall outside the channels (below channel 0 or at or above
/// the overflow channel, `means.len()`).
pub fn add_peak(means: &mut [f64], cal: &CalibrationConfig, energy_mev: f64, sigma_mev: f64, counts: f64) -> f64 {
    let z = |c: f64| (cal.energy_mev(c) - energy_mev) / sigma_mev;
    let n = means.len() as f64;
    let reach = |e: f64| cal.channel_of(e).clamp(-1.0, n + 1.0);
    let first = reach(energy_mev - PEAK_REACH_SIGMAS * sigma_mev).floor().max(0.0) as usize;
    let last = (reach(energy_mev + PEAK_REACH_SIGMAS * sigma_mev).ceil().max(0.0) as usize).min(means.len());
    let mut inside = 0.0;
    for (c, mean) in means.iter_mut().enumerate().take(last).skip(first) {
        let fraction = normal_cdf(z(c as f64 + 0.5)) - normal_cdf(z(c as f64 - 0.5));
        *mean += counts * fraction;
        inside += counts * fraction;
    }
    (counts - inside).max(0.0)
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    fn detector(yaml: &str) -> DetectorConfig {
        serde_yaml::from_str(yaml).expect("detector parses")
    }

    #[test]
    fn solid_angles_worked_by_hand() {
        // (detector, Ω in sr worked by hand, relative tolerance and why)
        let cases = [
            // r = d: cos β = 1/√2, Ω = 2π(1 − 1/√2) = 1.840302 sr.
            (
                "{ id: a, theta_lab_deg: 30.0, distance_mm: 10.0, aperture: { shape: circle, radius_mm: 10.0 } }",
                2.0 * std::f64::consts::PI * (1.0 - std::f64::consts::FRAC_1_SQRT_2),
                1e-14, // one square root and a subtraction of numbers of order 1
            ),
            // A square of half-side d: Ω = 4 arcsin(1/2) = 2π/3 (a sixth of the sphere: the
            // face of a cube seen from its centre).
            (
                "{ id: b, theta_lab_deg: 30.0, distance_mm: 5.0, aperture: { shape: rectangle, half_width_mm: 5.0, half_height_mm: 5.0 } }",
                2.0 * std::f64::consts::PI / 3.0,
                1e-14, // arcsin of an exact 1/2 up to rounding
            ),
            // r ≪ d: Ω → π r²/d² = π · 6.25/62500 = 3.14159e-4 sr, to O(r²/d²) = 1e-4.
            (
                "{ id: c, theta_lab_deg: 30.0, distance_mm: 250.0, aperture: { shape: circle, radius_mm: 2.5 } }",
                std::f64::consts::PI * 6.25 / 62_500.0,
                2e-4, // the small-angle limit differs by (3/4) r²/d² = 7.5e-5
            ),
            ("{ id: d, theta_lab_deg: 30.0, aperture: { shape: given, solid_angle_msr: 1.962 } }", 1.962e-3, 1e-15),
        ];
        for (yaml, want, tol) in cases {
            let got = solid_angle_sr(&detector(yaml)).expect("geometry given");
            assert_relative_eq!(got, want, max_relative = tol);
        }
    }

    #[test]
    fn luminosity_per_coulomb_worked_by_hand() {
        // (target, charge state, L/Q in 1/(cm² C) worked by hand)
        let cases = [
            // 12 g/cm² of 12C (one mole per cm²) and protons: N_A/e = 3.758724e42.
            ("{ areal_density_mg_cm2: 12000.0, molar_mass_g_mol: 12.0 }", 1, AVOGADRO_PER_MOL / ELEMENTARY_CHARGE_C),
            // Half of it the isotope, tilted by 60° (path doubled), charge state 2: the same.
            (
                "{ areal_density_mg_cm2: 12000.0, molar_mass_g_mol: 12.0, isotopic_fraction: 0.5, tilt_deg: 60.0 }",
                2,
                AVOGADRO_PER_MOL / ELEMENTARY_CHARGE_C / 2.0,
            ),
        ];
        for (yaml, q, want) in cases {
            let target: TargetConfig = serde_yaml::from_str(yaml).expect("target parses");
            // 1e-14: a cosine of 60° and a few products.
            assert_relative_eq!(luminosity_per_cm2_per_c(q, &target).expect("density"), want, max_relative = 1e-14);
        }
    }

    #[test]
    fn live_fractions_worked_by_hand() {
        // (model, n in 1/s, τ in s, f worked by hand: 1/(1 + nτ) or e^(−nτ))
        let cases = [
            (DeadTimeModel::NonParalyzable, 1e5, 1e-6, 1.0 / 1.1),
            (DeadTimeModel::Paralyzable, 1e5, 1e-6, (-0.1f64).exp()),
            (DeadTimeModel::Paralyzable, 3.5e4, 1e-5, (-0.35f64).exp()),
            (DeadTimeModel::NonParalyzable, 0.0, 1e-6, 1.0),
        ];
        for (model, n, tau, want) in cases {
            // 1e-15: one product and a division or exponential.
            assert_relative_eq!(live_fraction(model, n, tau), want, max_relative = 1e-15);
        }
    }

    #[test]
    fn a_peak_spreads_over_the_channels_and_what_falls_outside_is_returned() {
        let cal = CalibrationConfig {
            offset_mev: 0.0,
            gain_mev_per_channel: 0.01,
            quadratic_mev_per_channel2: 0.0,
            offset_err_mev: 0.0,
            gain_err_mev_per_channel: 0.0,
        };
        // (peak energy MeV, σ MeV, counts, expected counts outside 0..1000, worked by hand)
        let cases = [
            // Well inside: nothing lost.
            (5.0, 0.08, 1000.0, 0.0),
            // Centred on the edge of the last channel (999.5 → E = 9.995 MeV): half outside.
            (9.995, 0.08, 1000.0, 500.0),
        ];
        for (energy, sigma, counts, outside) in cases {
            let mut means = vec![0.0; 1000];
            let lost = add_peak(&mut means, &cal, energy, sigma, counts);
            // 1e-9 of the counts: the sum of a thousand differences of Φ.
            assert!((lost - outside).abs() < 1e-9 * counts, "{energy}: {lost}");
            assert!((means.iter().sum::<f64>() + lost - counts).abs() < 1e-9 * counts, "{energy}");
        }
        let mut means = vec![0.0; 1000];
        add_peak(&mut means, &cal, 5.0, 0.08, 1000.0);
        // The centre channel holds Φ(0.0625) − Φ(−0.0625) = 0.04983533805849444 of the peak
        // (scipy.stats.norm.cdf, scipy 1.x); 1e-12: statrs' erfc against scipy's.
        assert_relative_eq!(means[500], 1000.0 * 0.049_835_338_058_494_44, max_relative = 1e-12);
    }
}
