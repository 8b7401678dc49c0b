//! One run's events or spectra, tallied against a [`RawPlan`]: every event lands in exactly
//! one tally (see the order in [`crate::raw`]); integer channels are histogrammed and sorted
//! by the plan's channel categories at the end, other events one by one.
//! [`Accumulator::finish`] turns the counts into the yields rows (side bands, or a peak fit
//! from `peaks.rs`), the spectra and the (E, ΔE) histogram. Runs once per run, after the
//! plan is built.

use serde::Serialize;

use crate::physics::polygon::inside;

use super::peaks::{fit_detector, PeakFitRecord};
use super::plan::category;
use super::{BackgroundMethod, RawPlan};

/// Bins per axis of the 2-D (E, ΔE) histogram.
pub const PID_BINS: usize = 128;

/// Where the events went.
#[derive(Debug, Clone, Default, PartialEq, Eq, Serialize)]
pub struct Tally {
    /// Rows (events) read; for spectra, the sum of the counts.
    pub events: u64,
    /// Unknown detector id.
    pub unknown_detector: u64,
    /// NaN, negative or overflow value.
    pub invalid_value: u64,
    /// Pile-up or veto flag set.
    pub pile_up: u64,
    /// Inside a state's peak window.
    pub in_window: u64,
    /// Inside a side band.
    pub in_side_band: u64,
    /// Outside every gate (outside the PID polygon included).
    pub outside_gates: u64,
}

impl Tally {
    /// Whether the tallies add up to the events read.
    pub fn reconciles(&self) -> bool {
        self.unknown_detector
            + self.invalid_value
            + self.pile_up
            + self.in_window
            + self.in_side_band
            + self.outside_gates
            == self.events
    }
}

/// A spectrum row whose count is not a whole number ≥ 0.
#[derive(Debug, Clone, Copy, PartialEq, thiserror::Error)]
#[error("counts {counts}: expected a whole number ≥ 0")]
pub struct BadCount {
    /// The count found.
    pub counts: f64,
}

/// Accumulates one run's events.
pub struct Accumulator<'a> {
    plan: &'a RawPlan,
    /// Integer-channel events of detectors without PID: classified at the end by channel.
    hist_exact: Vec<u64>,
    /// Events classified one by one (float channels, PID), histogrammed for the spectra.
    hist_direct: Vec<u64>,
    /// Per detector × category, events classified one by one.
    direct: Vec<u64>,
    pid_hist: Vec<u64>,
    /// Tallies so far (window, side band and outside filled by [`Accumulator::finish`]).
    pub tally: Tally,
}

/// One row of the derived yields table.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct YieldRow {
    /// Detector id.
    pub detector: String,
    /// State.
    pub state: String,
    /// Kinematic branch (1, or 2 for the lower-energy peak of a double-valued angle).
    pub branch: u8,
    /// Counts in the peak window.
    pub counts_gross: f64,
    /// Background under the peak.
    pub counts_background: f64,
    /// Its standard uncertainty.
    pub counts_background_err: f64,
    /// The fraction of the peak the counting keeps: the window acceptance for side bands
    /// (see [`Gate`](super::Gate)), 1 for a fitted peak area.
    pub window_acceptance: f64,
    /// Its standard uncertainty.
    pub window_acceptance_err: f64,
}

/// What one run's raw data gave.
#[derive(Debug, Clone, PartialEq)]
pub struct RawResult {
    /// The yields table rows, detectors in config order, states in config order, then
    /// branch.
    pub yields: Vec<YieldRow>,
    /// Where the events went.
    pub tally: Tally,
    /// Spectra: (detector index, channel, counts) for non-empty channels.
    pub spectra: Vec<(usize, usize, u64)>,
    /// 2-D (E, ΔE) histogram: (detector index, E bin, ΔE bin, counts) for non-empty bins.
    pub pid: Vec<(usize, usize, usize, u64)>,
    /// Peak fits, when the background is fitted.
    pub peak_fits: Vec<PeakFitRecord>,
    /// What the reduction noticed (a peak fit that fell back to side bands, say).
    pub warnings: Vec<String>,
}

impl RawPlan {
    /// A new, empty accumulator.
    pub fn accumulator(&self) -> Accumulator<'_> {
        let n = self.detectors.len();
        let ncat = self.n_categories;
        Accumulator {
            plan: self,
            hist_exact: vec![0; n * self.n_channels],
            hist_direct: vec![0; n * self.n_channels],
            direct: vec![0; n * ncat],
            pid_hist: vec![0; n * PID_BINS * PID_BINS],
            tally: Tally::default(),
        }
    }
}

impl Accumulator<'_> {
    /// Add events with integer ADC channels (the fast path). `detector` holds detector
    /// indices ([`RawPlan::detector_index`], [`UNKNOWN_DETECTOR`](super::UNKNOWN_DETECTOR) for unknown ones);
    /// `pile_up` flags, `delta_e` values where the config maps them.
    pub fn add_u16(&mut self, detector: &[u16], channel: &[u16], pile_up: Option<&[bool]>, delta_e: Option<&[f64]>) {
        let n_ch = self.plan.n_channels;
        let n_det = self.plan.detectors.len();
        let any_pid = self.plan.detectors.iter().any(|d| d.pid.is_some());
        self.tally.events += detector.len() as u64;
        if pile_up.is_none() && !any_pid {
            for (&d, &c) in detector.iter().zip(channel) {
                let (d, c) = (d as usize, c as usize);
                if d >= n_det {
                    self.tally.unknown_detector += 1;
                } else if c >= n_ch {
                    self.tally.invalid_value += 1;
                } else {
                    self.hist_exact[d * n_ch + c] += 1;
                }
            }
            return;
        }
        // Pile-up flags and PID polygons: detectors without a polygon still go straight to
        // the channel histogram (same tally order as `classify`).
        let has_pid: Vec<bool> = self.plan.detectors.iter().map(|d| d.pid.is_some()).collect();
        for i in 0..detector.len() {
            let (d, c) = (detector[i] as usize, channel[i] as usize);
            if d < n_det && !has_pid[d] {
                if c >= n_ch {
                    self.tally.invalid_value += 1;
                } else if pile_up.is_some_and(|p| p[i]) {
                    self.tally.pile_up += 1;
                } else {
                    self.hist_exact[d * n_ch + c] += 1;
                }
            } else {
                self.classify(detector[i], f64::from(channel[i]), pile_up.map(|p| p[i]), delta_e.map(|e| e[i]));
            }
        }
    }

    /// Add events with channels of any numeric type, as f64 (NaN for missing values).
    pub fn add_f64(&mut self, detector: &[u16], channel: &[f64], pile_up: Option<&[bool]>, delta_e: Option<&[f64]>) {
        self.tally.events += detector.len() as u64;
        for i in 0..detector.len() {
            self.classify(detector[i], channel[i], pile_up.map(|p| p[i]), delta_e.map(|e| e[i]));
        }
    }

    /// Add a spectrum: `counts` events in `channel` of `detector`; integer channels.
    ///
    /// # Errors
    /// A negative, fractional or non-finite count (the row is named by the caller).
    pub fn add_spectrum_row(&mut self, detector: u16, channel: f64, counts: f64) -> Result<(), BadCount> {
        if !(counts.is_finite() && counts >= 0.0 && counts.fract() == 0.0) {
            return Err(BadCount { counts });
        }
        let n = counts as u64;
        self.tally.events += n;
        let (n_ch, d) = (self.plan.n_channels, detector as usize);
        if d >= self.plan.detectors.len() {
            self.tally.unknown_detector += n;
        } else if !(channel.is_finite() && channel >= 0.0 && channel.fract() == 0.0 && (channel as usize) < n_ch) {
            self.tally.invalid_value += n;
        } else {
            self.hist_exact[d * n_ch + channel as usize] += n;
        }
        Ok(())
    }

    fn classify(&mut self, det: u16, ch: f64, pile_up: Option<bool>, delta_e: Option<f64>) {
        let plan = self.plan;
        let (n_ch, d) = (plan.n_channels, det as usize);
        if d >= plan.detectors.len() {
            self.tally.unknown_detector += 1;
            return;
        }
        if !(ch >= 0.0 && ch < n_ch as f64) {
            self.tally.invalid_value += 1;
            return;
        }
        let dp = &plan.detectors[d];
        let de = delta_e.unwrap_or(f64::NAN);
        if dp.pid.is_some() && !(de >= 0.0 && de < n_ch as f64) {
            self.tally.invalid_value += 1;
            return;
        }
        if pile_up == Some(true) {
            self.tally.pile_up += 1;
            return;
        }
        let e = dp.cal.energy_mev(ch);
        if let Some(poly) = &dp.pid {
            let bin = |v: f64| ((v / n_ch as f64 * PID_BINS as f64) as usize).min(PID_BINS - 1);
            self.pid_hist[(d * PID_BINS + bin(ch)) * PID_BINS + bin(de)] += 1;
            if !inside(poly, e, de) {
                self.tally.outside_gates += 1;
                return;
            }
        }
        if dp.pid.is_none() && ch.fract() == 0.0 {
            self.hist_exact[d * n_ch + ch as usize] += 1;
            return;
        }
        let ncat = plan.n_categories;
        self.direct[d * ncat + category(dp, e) as usize] += 1;
        self.hist_direct[d * n_ch + ch as usize] += 1;
    }

    /// The yields, tallies and spectra.
    pub fn finish(mut self) -> RawResult {
        let plan = self.plan;
        let (n_ch, ncat) = (plan.n_channels, plan.n_categories);
        let mut counts = self.direct.clone();
        for d in 0..plan.detectors.len() {
            for ch in 0..n_ch {
                let n = self.hist_exact[d * n_ch + ch];
                if n > 0 {
                    counts[d * ncat + plan.categories[d * n_ch + ch] as usize] += n;
                }
            }
        }
        for d in 0..plan.detectors.len() {
            self.tally.outside_gates += counts[d * ncat];
            for k in 0..(ncat - 1) / 2 {
                self.tally.in_window += counts[d * ncat + 1 + 2 * k];
                self.tally.in_side_band += counts[d * ncat + 2 + 2 * k];
            }
        }
        let spectra: Vec<(usize, usize, u64)> = (0..plan.detectors.len() * n_ch)
            .filter_map(|i| {
                let n = self.hist_exact[i] + self.hist_direct[i];
                (n > 0).then_some((i / n_ch, i % n_ch, n))
            })
            .collect();
        let mut yields = Vec::new();
        let mut peak_fits = Vec::new();
        let mut warnings = Vec::new();
        for (d, det) in plan.detectors.iter().enumerate() {
            let spectrum = |ch: usize| (self.hist_exact[d * n_ch + ch] + self.hist_direct[d * n_ch + ch]) as f64;
            let fitted = match plan.config.background {
                BackgroundMethod::SideBands => None,
                m => match fit_detector(det, m, n_ch, &spectrum, plan.config.gates.resolution_mev) {
                    Ok(f) if f.converged && f.peaks.iter().all(|p| p.area >= 0.0) => Some(f),
                    Ok(f) => {
                        warnings.push(format!(
                            "{}: the peak fit {} (χ² {:.1} for {} degrees of freedom); side bands used instead",
                            det.id,
                            if f.converged { "gave a negative area" } else { "did not converge" },
                            f.chi2,
                            f.ndf
                        ));
                        None
                    }
                    Err(why) => {
                        warnings.push(format!("{}: {why}; side bands used instead of a peak fit", det.id));
                        None
                    }
                },
            };
            for (k, (_, g)) in det.gates.iter().enumerate() {
                let gross = counts[d * ncat + 1 + 2 * k] as f64;
                let side = counts[d * ncat + 2 + 2 * k] as f64;
                let (gross, bg, bg_err, acceptance) = match &fitted {
                    Some(f) => {
                        // The fitted area N ± σ_N becomes gross = N, background 0 ± √(σ_N² − N),
                        // so that the later net-count error √(gross + σ_bg²) is σ_N (or √N
                        // when the fit's error is below Poisson's). The window sum is in the
                        // peak-fit record.
                        let (n, e) = f.peaks.get(k).map_or((0.0, 0.0), |p| (p.area, p.area_err));
                        // The fitted Gaussian's whole area: nothing is outside a window.
                        (n, 0.0, (e * e - n).max(0.0).sqrt(), (1.0, 0.0))
                    }
                    None => {
                        let scale = g.window.width_mev() / (g.left.width_mev() + g.right.width_mev());
                        (gross, side * scale, side.sqrt() * scale, (g.window_acceptance, g.window_acceptance_err))
                    }
                };
                yields.push(YieldRow {
                    detector: det.id.clone(),
                    state: g.state.clone(),
                    branch: g.branch,
                    counts_gross: gross,
                    counts_background: bg,
                    counts_background_err: bg_err,
                    window_acceptance: acceptance.0,
                    window_acceptance_err: acceptance.1,
                });
            }
            if let Some(f) = fitted {
                peak_fits.push(f);
            }
        }
        let pid = (0..self.pid_hist.len())
            .filter(|&i| self.pid_hist[i] > 0)
            .map(|i| (i / (PID_BINS * PID_BINS), (i / PID_BINS) % PID_BINS, i % PID_BINS, self.pid_hist[i]))
            .collect();
        RawResult { yields, tally: self.tally, spectra, pid, peak_fits, warnings }
    }
}

#[cfg(test)]
mod tests {
    use crate::raw::testing::raw;
    use crate::setup::testing::setup;

    #[test]
    fn a_spectrum_count_must_be_a_whole_number() {
        let setup = setup("[{ id: A, theta_lab_deg: 30.0, aperture: { shape: given, solid_angle_msr: 1.0 } }]");
        let plan = raw("window_mev: [20.0, 20.5]", "side_bands").build(&setup).expect("the plan builds");
        let mut acc = plan.accumulator();
        // (count, accepted)
        let cases = [(3.0, true), (0.0, true), (-1.0, false), (1.5, false), (f64::NAN, false), (f64::INFINITY, false)];
        for (counts, accepted) in cases {
            match acc.add_spectrum_row(0, 161.0, counts) {
                Ok(()) => assert!(accepted, "{counts} accepted"),
                Err(e) => {
                    assert!(!accepted, "{counts} refused: {e}");
                    assert_eq!(e.to_string(), format!("counts {counts}: expected a whole number ≥ 0"));
                }
            }
        }
        assert_eq!(acc.finish().tally.events, 3);
    }
}
