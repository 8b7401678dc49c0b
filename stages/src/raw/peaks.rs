//! The fitted background: when `background` is a peak fit, every state of one detector is
//! fitted at once with Gaussians on a linear or exponential background
//! ([`crate::physics::peak_fit`]) over the region from the lowest side band to the highest.
//! Called by [`Accumulator::finish`](super::Accumulator::finish) per detector; a fit that
//! fails or gives a negative area falls back to the side bands there.

use serde::Serialize;

use crate::physics::peak_fit::{fit_peaks, Background, PeakModel};

use super::plan::DetectorPlan;
use super::BackgroundMethod;

/// A peak fit of one detector, as recorded.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PeakFitRecord {
    /// Detector id.
    pub detector: String,
    /// χ².
    pub chi2: f64,
    /// Degrees of freedom.
    pub ndf: usize,
    /// Converged.
    pub converged: bool,
    /// Per gate (state and branch), its fitted peak, in the gates' order.
    pub peaks: Vec<FittedPeak>,
    /// Per gate, the counts in the peak window.
    pub window_counts: Vec<f64>,
}

/// One state's peak in a peak fit.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FittedPeak {
    /// State name.
    pub state: String,
    /// Kinematic branch.
    pub branch: u8,
    /// Centroid, MeV.
    pub centroid_mev: f64,
    /// Width (standard deviation), MeV.
    pub width_mev: f64,
    /// Area in counts.
    pub area: f64,
    /// Its standard uncertainty.
    pub area_err: f64,
}

/// Fewest counts in a detector's fit region for a peak fit; below it the side bands serve.
pub const PEAK_FIT_MIN_COUNTS: f64 = 50.0;

/// Fit every state of one detector at once: Gaussians on a background over the region from
/// the lowest side band to the highest, bins = channels.
pub(super) fn fit_detector(
    det: &DetectorPlan,
    method: BackgroundMethod,
    n_ch: usize,
    spectrum: &dyn Fn(usize) -> f64,
    resolution_mev: f64,
) -> Result<PeakFitRecord, String> {
    let lo = det.gates.iter().map(|(_, g)| g.left.low_mev).fold(f64::INFINITY, f64::min);
    let hi = det.gates.iter().map(|(_, g)| g.right.high_mev).fold(f64::NEG_INFINITY, f64::max);
    let (x, y): (Vec<f64>, Vec<f64>) =
        (0..n_ch).map(|ch| (det.cal.energy_mev(ch as f64), spectrum(ch))).filter(|(e, _)| *e >= lo && *e < hi).unzip();
    let total: f64 = y.iter().sum();
    if det.gates.is_empty() || x.len() < 2 + 3 * det.gates.len() + 1 || total < PEAK_FIT_MIN_COUNTS {
        return Err(format!(
            "{total} counts in {} bins of the fit region (a fit needs {PEAK_FIT_MIN_COUNTS})",
            x.len()
        ));
    }
    let background =
        if method == BackgroundMethod::PeakFitExponential { Background::Exponential } else { Background::Linear };
    let model = PeakModel { background, peaks: det.gates.len() };
    let sigma: Vec<f64> = y.iter().map(|n| n.max(1.0).sqrt()).collect();
    let side: Vec<f64> = det
        .gates
        .iter()
        .flat_map(|(_, g)| {
            x.iter().zip(&y).filter(move |(e, _)| g.left.contains(**e) || g.right.contains(**e)).map(|(_, n)| *n)
        })
        .collect();
    let b0 = if side.is_empty() { 0.0 } else { side.iter().sum::<f64>() / side.len() as f64 };
    let mut p0 = vec![b0.max(1e-3), 0.0];
    for (_, g) in &det.gates {
        let peak = x.iter().zip(&y).filter(|(e, _)| g.window.contains(**e)).map(|(_, n)| *n).fold(0.0, f64::max);
        let centre = if g.energy_kinematic_mev.is_finite() {
            g.energy_kinematic_mev
        } else {
            0.5 * (g.window.low_mev + g.window.high_mev)
        };
        p0.extend([(peak - b0).max(1.0), centre, resolution_mev]);
    }
    let bin = det.cal.gain_mev_per_channel;
    let fit = fit_peaks(&model, &x, &y, &sigma, &p0, bin);
    Ok(PeakFitRecord {
        detector: det.id.clone(),
        window_counts: det
            .gates
            .iter()
            .map(|(_, g)| x.iter().zip(&y).filter(|(e, _)| g.window.contains(**e)).map(|(_, n)| *n).sum())
            .collect(),
        chi2: fit.chi2,
        ndf: fit.ndf,
        converged: fit.termination.converged(),
        peaks: det
            .gates
            .iter()
            .zip(&fit.peaks)
            .map(|((_, g), p)| FittedPeak {
                state: g.state.clone(),
                branch: g.branch,
                centroid_mev: p.centroid,
                width_mev: p.width,
                area: p.area,
                area_err: p.area_err,
            })
            .collect(),
    })
}
