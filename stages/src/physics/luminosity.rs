//! Integrated luminosity (beam particles × target atoms per cm²) from a monitor detector
//! that sees pure Rutherford scattering.

use super::constants::{MB_PER_CM2, SR_PER_MSR};
use super::uncertainty::quadrature;

/// One monitor point: its net counts and what one unit of luminosity would give it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MonitorPoint {
    /// Net counts Y and their standard uncertainty.
    pub counts_net: (f64, f64),
    /// Fraction A of the monitor's peak inside its window (1 for a fitted peak area or a
    /// yields table) and its uncertainty: the counts are A times those of the whole peak.
    pub window_acceptance: (f64, f64),
    /// Efficiency and its uncertainty.
    pub efficiency: (f64, f64),
    /// Solid angle in msr and its uncertainty.
    pub solid_angle_msr: (f64, f64),
    /// Live fraction and the part of its uncertainty that is this monitor's own
    /// (per-detector dead time); 0 when one live fraction holds for every detector of the
    /// run, whose error then cancels.
    pub live_fraction: (f64, f64),
    /// Rutherford cross section in the lab at the monitor, mb/sr.
    pub rutherford_lab_mb_sr: f64,
}

/// Integrated luminosity L in 1/cm² and its relative uncertainty from monitors:
///     Y_i = A_i ε_i f_live L ΔΩ_i σ_R,lab(θ_i)   ⇒   L = Σ Y_i / Σ S_i,
///     S_i = A_i ε_i f_live ΔΩ_i σ_R,lab(θ_i),
///     (u_L/L)² = Σ u(Y_i)² / (Σ Y_i)²
///              + Σ S_i² ((u(A_i)/A_i)² + (u(ε_i)/ε_i)² + (u(ΔΩ_i)/ΔΩ_i)² + (u(f_i)/f_i)²) / (Σ S_i)²
/// with A_i the window acceptance of the monitor's peak (the same correction the cross
/// sections get, so that a monitor's own row is Rutherford again)
/// (the weighted sum is the maximum-likelihood estimate for Poisson counts; GUM Eq. 10 for
/// the error). A live fraction common to the run cancels in the cross sections normalised
/// this way (it enters the monitor and the other detectors alike), so its error is not part
/// of u_L (u(f_i) = 0); a monitor's own live fraction (per-detector dead time) does not
/// cancel, and its error u(f_i) is.
/// Common practice for relative normalisation to a Rutherford monitor.
pub fn from_monitors(points: &[MonitorPoint]) -> (f64, f64) {
    let sum_y: f64 = points.iter().map(|p| p.counts_net.0).sum();
    let s: Vec<f64> = points
        .iter()
        .map(|p| {
            p.window_acceptance.0
                * p.efficiency.0
                * p.live_fraction.0
                * p.solid_angle_msr.0
                * SR_PER_MSR
                * p.rutherford_lab_mb_sr
                / MB_PER_CM2
        })
        .collect();
    let sum_s: f64 = s.iter().sum();
    let stat = quadrature(&points.iter().map(|p| p.counts_net.1).collect::<Vec<_>>()) / sum_y;
    let sys = quadrature(
        &points
            .iter()
            .zip(&s)
            .map(|(p, si)| {
                si * quadrature(&[
                    p.window_acceptance.1 / p.window_acceptance.0,
                    p.efficiency.1 / p.efficiency.0,
                    p.solid_angle_msr.1 / p.solid_angle_msr.0,
                    p.live_fraction.1 / p.live_fraction.0,
                ])
            })
            .collect::<Vec<_>>(),
    ) / sum_s;
    (sum_y / sum_s, quadrature(&[stat, sys]))
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn a_monitor_window_that_keeps_part_of_the_peak_scales_the_luminosity_back() {
        // One monitor worked by hand: ε = 1, f = 1, ΔΩ = 1 msr = 1e-3 sr, σ_R = 1000 mb/sr =
        // 1e-24 cm² per sr, so S = A · 1e-27 cm²; Y = 1000 ± √1000 counts.
        // (A, u(A), L in 1/cm², u_L/L = √(1/1000 + (u(A)/A)²))
        let cases = [(1.0, 0.0, 1e30, (1e-3f64).sqrt()), (0.5, 0.005, 2e30, (1e-3f64 + 1e-4).sqrt())];
        for (a, a_err, want, want_rel) in cases {
            let point = MonitorPoint {
                counts_net: (1000.0, 1000f64.sqrt()),
                window_acceptance: (a, a_err),
                efficiency: (1.0, 0.0),
                solid_angle_msr: (1.0, 0.0),
                live_fraction: (1.0, 0.0),
                rutherford_lab_mb_sr: 1000.0,
            };
            let (l, rel) = from_monitors(&[point]);
            // 1e-12: a few products and square roots.
            assert_relative_eq!(l, want, max_relative = 1e-12);
            assert_relative_eq!(rel, want_rel, max_relative = 1e-12);
        }
    }
}
