//! The fitted background: when `background` is a peak fit, every state of one detector is
//! fitted at once with Gaussians on a linear or exponential background
//! ([`crate::physics::peak_fit`]) over the region from the lowest side band to the highest.
//! Called by [`Accumulator::finish`](super::Accumulator::finish) per detector; a fit that
//! fails or gives a negative area falls back to the side bands there.

use serde::Serialize;

use crate::physics::peak_fit::{fit_counts, Background, PeakModel};

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
    /// The fitted background, for plots.
    pub background: FittedBackground,
}

/// The background of a peak fit in counts per channel at energy E (MeV): `linear`
/// b₀ + b₁E or `exponential` b₀ exp(−b₁E), over the fit region.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FittedBackground {
    /// `linear` or `exponential`.
    pub shape: &'static str,
    /// b₀ in counts per channel.
    pub b0: f64,
    /// b₁ in counts per channel per MeV (linear) or 1/MeV (exponential).
    pub b1: f64,
    /// The fit region's first and last channel energies, MeV.
    pub region_mev: [f64; 2],
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

/// Why a detector's peaks were not fitted (its side bands serve instead).
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum PeakFitSkipped {
    /// The detector has no state to fit.
    #[error("no state has a window in this detector")]
    NoStates,
    /// Fewer bins in the fit region than parameters plus one.
    #[error("{bins} bins in the fit region; fitting {peaks} state(s) needs at least {needed}")]
    TooFewBins {
        /// Bins (channels) in the fit region.
        bins: usize,
        /// Peaks (states) to fit.
        peaks: usize,
        /// Bins needed: the 2 + 3 × peaks parameters, plus one.
        needed: usize,
    },
    /// Too few counts to fit.
    #[error("{counts} counts in {bins} bins of the fit region (a fit needs {PEAK_FIT_MIN_COUNTS})")]
    TooFewCounts {
        /// Counts in the fit region.
        counts: f64,
        /// Bins (channels) in the fit region.
        bins: usize,
    },
}

/// Fit every state of one detector at once: Gaussians on a background over the region from
/// the lowest side band to the highest, bins = channels.
///
/// # Errors
/// No state, fewer bins than parameters plus one, or fewer than [`PEAK_FIT_MIN_COUNTS`]
/// counts in the fit region: the side bands serve.
pub(super) fn fit_detector(
    det: &DetectorPlan,
    method: BackgroundMethod,
    n_ch: usize,
    spectrum: &dyn Fn(usize) -> f64,
    resolution_mev: f64,
) -> Result<PeakFitRecord, PeakFitSkipped> {
    let lo = det.gates.iter().map(|(_, g)| g.left.low_mev).fold(f64::INFINITY, f64::min);
    let hi = det.gates.iter().map(|(_, g)| g.right.high_mev).fold(f64::NEG_INFINITY, f64::max);
    let (x, y): (Vec<f64>, Vec<f64>) =
        (0..n_ch).map(|ch| (det.cal.energy_mev(ch as f64), spectrum(ch))).filter(|(e, _)| *e >= lo && *e < hi).unzip();
    let total: f64 = y.iter().sum();
    // Impurity peaks inside the region are fitted too, as peaks of no state.
    let impurities: Vec<f64> = det.impurity_mev.iter().copied().filter(|e| *e >= lo && *e < hi).collect();
    let (peaks, bins) = (det.gates.len() + impurities.len(), x.len());
    if peaks == 0 {
        return Err(PeakFitSkipped::NoStates);
    }
    if bins < 2 + 3 * peaks + 1 {
        return Err(PeakFitSkipped::TooFewBins { bins, peaks, needed: 2 + 3 * peaks + 1 });
    }
    if total < PEAK_FIT_MIN_COUNTS {
        return Err(PeakFitSkipped::TooFewCounts { counts: total, bins });
    }
    let background =
        if method == BackgroundMethod::PeakFitExponential { Background::Exponential } else { Background::Linear };
    let model = PeakModel { background, peaks };
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
    for e in &impurities {
        let near = x.iter().zip(&y).filter(|(x, _)| (**x - e).abs() <= resolution_mev).map(|(_, n)| *n);
        p0.extend([(near.fold(0.0, f64::max) - b0).max(1.0), *e, resolution_mev]);
    }
    let bin = det.cal.gain_mev_per_channel;
    let fit = fit_counts(&model, &x, &y, &p0, bin);
    let shape = match background {
        Background::Linear => "linear",
        Background::Exponential => "exponential",
    };
    Ok(PeakFitRecord {
        background: FittedBackground {
            shape,
            b0: fit.params[0],
            b1: fit.params[1],
            region_mev: [x[0], x[x.len() - 1]],
        },
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

#[cfg(test)]
mod tests {
    use crate::raw::testing::raw;
    use crate::setup::testing::setup;

    #[test]
    fn a_detector_too_poor_for_a_peak_fit_says_why_and_keeps_its_side_bands() {
        let wide = "window_mev: [20.0, 20.5], left_mev: [19.5, 20.0], right_mev: [20.5, 21.0]";
        let narrow = "window_mev: [20.0, 20.25], left_mev: [19.75, 20.0], right_mev: [20.25, 20.375]";
        // (window and side bands, counts in channel 161 (20.125 MeV, inside the window),
        // the warning; the fit region runs from the left band's low end to the right band's
        // high end: 156..167 is 12 bins, 158..162 is 5)
        let cases = [
            (
                wide,
                10,
                "A: 10 counts in 12 bins of the fit region (a fit needs 50); side bands used instead of a peak fit",
            ),
            (
                narrow,
                1000,
                "A: 5 bins in the fit region; fitting 1 state(s) needs at least 6; side bands used instead of a \
                 peak fit",
            ),
        ];
        let setup = setup("[{ id: A, theta_lab_deg: 30.0, aperture: { shape: given, solid_angle_msr: 1.0 } }]");
        for (window, counts, warning) in cases {
            let plan = raw(window, "peak_fit_linear").build(&setup).expect("the plan builds");
            let mut acc = plan.accumulator();
            acc.add_spectrum_row(0, 161.0, f64::from(counts)).expect("a whole count");
            let result = acc.finish();
            assert_eq!(result.warnings, [warning]);
            assert!(result.peak_fits.is_empty());
            // The side bands hold nothing: the yield is the window's counts.
            assert_eq!(result.yields.len(), 1);
            assert_eq!(result.yields[0].counts_gross.to_bits(), f64::from(counts).to_bits(), "{window}");
        }
    }
}
