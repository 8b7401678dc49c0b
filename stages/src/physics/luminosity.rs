//! Integrated luminosity (beam particles × target atoms per cm²) from a monitor detector
//! that sees pure Rutherford scattering.

use super::constants::{MB_PER_CM2, SR_PER_MSR};
use super::uncertainty::quadrature;

/// One monitor point: its net counts and what one unit of luminosity would give it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MonitorPoint {
    /// Net counts Y and their standard uncertainty.
    pub counts_net: (f64, f64),
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
///     Y_i = ε_i f_live L ΔΩ_i σ_R,lab(θ_i)   ⇒   L = Σ Y_i / Σ S_i,
///     S_i = ε_i f_live ΔΩ_i σ_R,lab(θ_i),
///     (u_L/L)² = Σ u(Y_i)² / (Σ Y_i)² + Σ S_i² ((u(ε_i)/ε_i)² + (u(ΔΩ_i)/ΔΩ_i)² + (u(f_i)/f_i)²) / (Σ S_i)²
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
            p.efficiency.0 * p.live_fraction.0 * p.solid_angle_msr.0 * SR_PER_MSR * p.rutherford_lab_mb_sr / MB_PER_CM2
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
                    p.efficiency.1 / p.efficiency.0,
                    p.solid_angle_msr.1 / p.solid_angle_msr.0,
                    p.live_fraction.1 / p.live_fraction.0,
                ])
            })
            .collect::<Vec<_>>(),
    ) / sum_s;
    (sum_y / sum_s, quadrature(&[stat, sys]))
}
