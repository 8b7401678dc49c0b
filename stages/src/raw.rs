//! From raw data to yields: list-mode events (one row per detected particle) or histogram
//! spectra, through an energy calibration, gates around the kinematic energy of each state
//! (or written windows), optional 2-D particle-identification polygons on (E, ΔE), and a
//! background from side bands or from a Gaussian peak fit. The result is the yields table of
//! [`crate::yields`], so every later stage runs unchanged, with a tally of where every event
//! went, the spectra and the gate positions.
//!
//! Every event lands in exactly one tally, checked in this order: unknown detector id;
//! invalid value (NaN, negative, at or above the overflow channel, or an invalid ΔE where a
//! polygon needs it); pile-up or veto flag; outside the detector's PID polygon (counted as
//! outside all gates); then the first window (states in config order) or side band that
//! holds its energy; else outside all gates.
//!
//! Energies: E(c) = e₀ + g c + q c² (MeV) for ADC channel c, with its uncertainty
//! σ_E² = σ_e₀² + c² σ_g² (offset and gain errors independent). Automatic windows:
//! E_kin ± w σ_res, side bands of width b σ_res at a gap of d σ_res on both sides; the
//! linear background under the peak is (N_left + N_right) · W_peak/(W_left + W_right), its
//! variance (N_left + N_right) (W_peak/(W_left + W_right))² (common practice). E_kin is the
//! relativistic two-body energy of the detected particle at the detector's angle (first
//! branch), without energy loss in the target or a dead layer (put that in the calibration).

use std::collections::BTreeMap;

use schemars::JsonSchema;
use serde::{Deserialize, Serialize};

use crate::physics::kinematics::Mode;
use crate::physics::peak_fit::{fit_peaks, Background, PeakModel};
use crate::physics::polygon::{inside, polygon_problem};
use crate::problem::Checks;
use crate::{Problem, Setup};

/// Column names in the event files of one acquisition system.
#[derive(Debug, Clone, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct EventColumns {
    /// Detector column (integer or string).
    pub detector: String,
    /// Energy signal: ADC channel (integer or float).
    pub energy: String,
    /// ΔE signal, for particle-identification polygons.
    #[serde(default)]
    pub delta_e: Option<String>,
    /// Time stamp (read only to check it exists; not used for gating).
    #[serde(default)]
    pub time: Option<String>,
    /// Pile-up or veto flag: events with a non-zero value are tallied apart.
    #[serde(default)]
    pub pile_up: Option<String>,
}

/// Column names in spectrum files (one row per detector and channel).
#[derive(Debug, Clone, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct SpectrumColumns {
    /// Detector column.
    #[serde(default = "default_detector")]
    pub detector: String,
    /// Channel column.
    #[serde(default = "default_channel")]
    pub channel: String,
    /// Counts column.
    #[serde(default = "default_counts")]
    pub counts: String,
}

fn default_detector() -> String {
    "detector".into()
}
fn default_channel() -> String {
    "channel".into()
}
fn default_counts() -> String {
    "counts".into()
}

impl Default for SpectrumColumns {
    fn default() -> Self {
        SpectrumColumns { detector: default_detector(), channel: default_channel(), counts: default_counts() }
    }
}

/// Channel → MeV: E = offset + gain·c + quadratic·c².
#[derive(Debug, Clone, Copy, Deserialize, Serialize, JsonSchema, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct CalibrationConfig {
    /// e₀ in MeV.
    pub offset_mev: f64,
    /// g in MeV per channel; > 0.
    pub gain_mev_per_channel: f64,
    /// q in MeV per channel²; the calibration must rise over every channel.
    #[serde(default)]
    pub quadratic_mev_per_channel2: f64,
    /// Standard uncertainty of e₀, MeV.
    #[serde(default)]
    pub offset_err_mev: f64,
    /// Standard uncertainty of g, MeV per channel.
    #[serde(default)]
    pub gain_err_mev_per_channel: f64,
}

impl CalibrationConfig {
    /// E(c) in MeV.
    pub fn energy_mev(&self, c: f64) -> f64 {
        self.offset_mev + c * (self.gain_mev_per_channel + c * self.quadratic_mev_per_channel2)
    }
    /// σ_E(c) in MeV.
    pub fn energy_err_mev(&self, c: f64) -> f64 {
        self.offset_err_mev.hypot(c * self.gain_err_mev_per_channel)
    }
}

/// A written window for one detector and state, replacing the automatic one.
#[derive(Debug, Clone, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct WindowConfig {
    /// Detector id.
    pub detector: String,
    /// State name.
    pub state: String,
    /// Peak window [low, high) in MeV (or give `window_channels`).
    #[serde(default)]
    pub window_mev: Option<[f64; 2]>,
    /// Peak window [low, high) in ADC channels, converted by the detector's calibration.
    #[serde(default)]
    pub window_channels: Option<[f64; 2]>,
    /// Left side band [low, high) in MeV; default from the automatic rule.
    #[serde(default)]
    pub left_mev: Option<[f64; 2]>,
    /// Left side band in channels.
    #[serde(default)]
    pub left_channels: Option<[f64; 2]>,
    /// Right side band [low, high) in MeV; default from the automatic rule.
    #[serde(default)]
    pub right_mev: Option<[f64; 2]>,
    /// Right side band in channels.
    #[serde(default)]
    pub right_channels: Option<[f64; 2]>,
}

impl WindowConfig {
    /// One interval given in MeV or in channels (converted by `cal`), if given.
    fn interval(mev: Option<[f64; 2]>, channels: Option<[f64; 2]>, cal: &CalibrationConfig) -> Option<Interval> {
        mev.map(Interval::new).or_else(|| channels.map(|[a, b]| Interval::new([cal.energy_mev(a), cal.energy_mev(b)])))
    }
}

/// Gates: automatic windows around the kinematic energies, and written ones.
#[derive(Debug, Clone, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct GatesConfig {
    /// Peak resolution σ in MeV (standard deviation); > 0.
    pub resolution_mev: f64,
    /// Half width of the peak window in units of σ (default 3).
    #[serde(default = "three")]
    pub window_resolutions: f64,
    /// Gap between window and side bands in units of σ (default 1).
    #[serde(default = "one")]
    pub side_band_gap_resolutions: f64,
    /// Width of each side band in units of σ (default 3).
    #[serde(default = "three")]
    pub side_band_width_resolutions: f64,
    /// Let the windows of two states of one detector overlap (an event then goes to the
    /// first state); default false: overlap is an error.
    #[serde(default)]
    pub allow_overlap: bool,
    /// Written windows.
    #[serde(default)]
    pub windows: Vec<WindowConfig>,
}

fn three() -> f64 {
    3.0
}
fn one() -> f64 {
    1.0
}

/// How the background under a peak is found.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Deserialize, Serialize, JsonSchema)]
#[serde(rename_all = "snake_case")]
pub enum BackgroundMethod {
    /// Linear, from the side bands.
    #[default]
    SideBands,
    /// Gaussian peaks on a linear background fitted over window and side bands.
    PeakFitLinear,
    /// Gaussian peaks on an exponential background.
    PeakFitExponential,
}

/// The `raw:` section of a config: how events and spectra become yields.
#[derive(Debug, Clone, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct RawConfig {
    /// Event-file columns.
    pub columns: EventColumns,
    /// Spectrum-file columns.
    #[serde(default)]
    pub spectrum_columns: SpectrumColumns,
    /// Detector values in the files → detector ids of the config; default: the value as
    /// text is the id.
    #[serde(default)]
    pub detector_ids: BTreeMap<String, String>,
    /// Channels at or above this are overflow (invalid); default 65535.
    #[serde(default = "default_overflow")]
    pub overflow_channel: u32,
    /// Calibration per detector id; the key `all` applies to detectors without their own.
    pub calibration: BTreeMap<String, CalibrationConfig>,
    /// Gates.
    pub gates: GatesConfig,
    /// PID polygons per detector id: vertices (E in MeV, ΔE in its own units).
    #[serde(default)]
    pub pid: BTreeMap<String, Vec<[f64; 2]>>,
    /// Background method.
    #[serde(default)]
    pub background: BackgroundMethod,
}

fn default_overflow() -> u32 {
    65535
}

/// A [low, high) interval in MeV.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Interval {
    /// Low edge.
    pub low_mev: f64,
    /// High edge.
    pub high_mev: f64,
}

impl Interval {
    fn new(a: [f64; 2]) -> Self {
        Interval { low_mev: a[0], high_mev: a[1] }
    }
    fn contains(&self, e: f64) -> bool {
        self.low_mev <= e && e < self.high_mev
    }
    fn overlaps(&self, o: &Interval) -> bool {
        self.low_mev < o.high_mev && o.low_mev < self.high_mev
    }
    fn width(&self) -> f64 {
        self.high_mev - self.low_mev
    }
}

/// The gates of one detector and state, as used (recorded with the spectra).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Gate {
    /// Detector id.
    pub detector: String,
    /// State.
    pub state: String,
    /// Kinematic energy, MeV (automatic windows are centred on it).
    pub energy_kinematic_mev: f64,
    /// Peak window.
    pub window: Interval,
    /// Left side band.
    pub left: Interval,
    /// Right side band.
    pub right: Interval,
}

/// One detector's plan.
#[derive(Debug, Clone)]
struct DetectorPlan {
    id: String,
    cal: CalibrationConfig,
    gates: Vec<(usize, Gate)>,
    pid: Option<Vec<[f64; 2]>>,
}

/// A checked `raw:` section for one set-up.
#[derive(Debug, Clone)]
pub struct RawPlan {
    /// The section.
    pub config: RawConfig,
    detectors: Vec<DetectorPlan>,
    states: Vec<String>,
    /// Per detector, per channel: the category index (see [`RawPlan::category_name`]).
    categories: Vec<u8>,
    n_channels: usize,
}

/// The largest `overflow_channel`: spectra are held as one histogram per detector, so the
/// channel count bounds the memory (2^20 channels, 8 MB per detector).
pub const MAX_CHANNELS: u32 = 1 << 20;

/// Marks an event whose detector value is not a known detector.
pub const UNKNOWN_DETECTOR: u16 = u16::MAX;
/// Bins per axis of the 2-D (E, ΔE) histogram.
pub const PID_BINS: usize = 128;

impl RawConfig {
    /// Check the section against the set-up: every detector calibrated and rising, windows
    /// inside the spectrum, no two windows of a detector overlapping (unless allowed), no
    /// side band overlapping a window, polygons valid.
    ///
    /// # Errors
    /// Every problem, keys relative to `raw`.
    pub fn build(&self, setup: &Setup) -> Result<RawPlan, Vec<Problem>> {
        let mut c = Checks::default();
        let g = &self.gates;
        c.positive("gates.resolution_mev", g.resolution_mev);
        c.positive("gates.window_resolutions", g.window_resolutions);
        c.non_negative("gates.side_band_gap_resolutions", g.side_band_gap_resolutions);
        c.positive("gates.side_band_width_resolutions", g.side_band_width_resolutions);
        c.require(
            (2..=MAX_CHANNELS).contains(&self.overflow_channel),
            "overflow_channel",
            self.overflow_channel,
            &format!("a channel count from 2 to {MAX_CHANNELS}"),
        );
        let ids: Vec<&str> = setup.detectors.iter().map(|d| d.id.0.as_str()).collect();
        for (k, id) in &self.detector_ids {
            c.require(
                ids.contains(&id.as_str()),
                &format!("detector_ids.{k}"),
                id,
                &format!("a detector id ({})", ids.join(", ")),
            );
        }
        for key in self.calibration.keys().chain(self.pid.keys()) {
            c.require(
                key == "all" || ids.contains(&key.as_str()),
                key,
                key,
                &format!("a detector id ({}) or `all`", ids.join(", ")),
            );
        }
        let states: Vec<String> = setup.reaction.states.iter().map(|s| s.name.clone()).collect();
        for (i, w) in g.windows.iter().enumerate() {
            let key = format!("gates.windows[{i}]");
            c.require(ids.contains(&w.detector.as_str()), &format!("{key}.detector"), &w.detector, "a detector id");
            c.require(
                states.contains(&w.state),
                &format!("{key}.state"),
                &w.state,
                &format!("a state ({})", states.join(", ")),
            );
            for (a, b) in [
                ("window", (w.window_mev, w.window_channels)),
                ("left", (w.left_mev, w.left_channels)),
                ("right", (w.right_mev, w.right_channels)),
            ] {
                c.require(
                    b.0.is_none() || b.1.is_none(),
                    &format!("{key}.{a}_channels"),
                    "both MeV and channels",
                    &format!("{a}_mev or {a}_channels, not both"),
                );
            }
            c.require(
                w.window_mev.is_some() || w.window_channels.is_some(),
                &format!("{key}.window_mev"),
                "missing",
                "window_mev or window_channels",
            );
            for (name, iv) in [
                ("window_mev", w.window_mev),
                ("window_channels", w.window_channels),
                ("left_mev", w.left_mev),
                ("left_channels", w.left_channels),
                ("right_mev", w.right_mev),
                ("right_channels", w.right_channels),
            ] {
                if let Some([a, b]) = iv {
                    c.require(
                        a.is_finite() && b.is_finite() && a < b,
                        &format!("{key}.{name}"),
                        format!("[{a}, {b}]"),
                        "[low, high] with low < high",
                    );
                }
            }
        }
        let n_ch = self.overflow_channel as usize;
        let mut detectors = Vec::new();
        for det in &setup.detectors {
            let det_id = det.id.0.clone();
            let Some(cal) = self.calibration.get(&det_id).or_else(|| self.calibration.get("all")).copied() else {
                c.require(
                    false,
                    &format!("calibration.{det_id}"),
                    "missing",
                    "a calibration for every detector (or `all`)",
                );
                continue;
            };
            let key = if self.calibration.contains_key(&det_id) { det_id.clone() } else { "all".into() };
            let top = n_ch.saturating_sub(1) as f64;
            let rising = cal.gain_mev_per_channel > 0.0
                && cal.gain_mev_per_channel + 2.0 * cal.quadratic_mev_per_channel2 * top > 0.0;
            c.require(
                rising,
                &format!("calibration.{key}"),
                format!("gain {} MeV/ch, quadratic {}", cal.gain_mev_per_channel, cal.quadratic_mev_per_channel2),
                "a calibration that rises over every channel (gain > 0)",
            );
            c.non_negative(&format!("calibration.{key}.offset_err_mev"), cal.offset_err_mev);
            c.non_negative(&format!("calibration.{key}.gain_err_mev_per_channel"), cal.gain_err_mev_per_channel);
            let mut gates = Vec::new();
            for (si, state) in states.iter().enumerate() {
                let e_kin = setup.resolved.as_ref().and_then(|r| {
                    r.channel(state)?
                        .at_lab_angle(det.theta_lab_deg.to_radians(), r.detect, Mode::Relativistic)
                        .first()
                        .map(|s| s.energy_lab_mev)
                });
                let written = g.windows.iter().find(|w| w.detector == det_id && &w.state == state);
                let (s, wr, gap, bw) = (
                    g.resolution_mev,
                    g.window_resolutions,
                    g.side_band_gap_resolutions,
                    g.side_band_width_resolutions,
                );
                let written_window =
                    written.and_then(|w| WindowConfig::interval(w.window_mev, w.window_channels, &cal));
                let window = match (written_window, e_kin) {
                    (Some(w), _) => w,
                    (None, Some(e)) => Interval { low_mev: e - wr * s, high_mev: e + wr * s },
                    (None, None) => continue, // the state cannot reach this angle
                };
                let left = written.and_then(|w| WindowConfig::interval(w.left_mev, w.left_channels, &cal)).unwrap_or(
                    Interval { low_mev: window.low_mev - (gap + bw) * s, high_mev: window.low_mev - gap * s },
                );
                let right =
                    written.and_then(|w| WindowConfig::interval(w.right_mev, w.right_channels, &cal)).unwrap_or(
                        Interval { low_mev: window.high_mev + gap * s, high_mev: window.high_mev + (gap + bw) * s },
                    );
                gates.push((
                    si,
                    Gate {
                        detector: det_id.clone(),
                        state: state.clone(),
                        energy_kinematic_mev: e_kin.unwrap_or(f64::NAN),
                        window,
                        left,
                        right,
                    },
                ));
            }
            for (a, (_, ga)) in gates.iter().enumerate() {
                for (_, gb) in &gates[a + 1..] {
                    c.require(
                        g.allow_overlap || !ga.window.overlaps(&gb.window),
                        "gates",
                        format!(
                            "{det_id}: windows of {} [{:.4}, {:.4}) and {} [{:.4}, {:.4}) MeV overlap",
                            ga.state,
                            ga.window.low_mev,
                            ga.window.high_mev,
                            gb.state,
                            gb.window.low_mev,
                            gb.window.high_mev
                        ),
                        "windows of one detector's states apart (or gates.allow_overlap: true)",
                    );
                }
                for (_, gb) in &gates {
                    for (side, iv) in [("left", ga.left), ("right", ga.right)] {
                        c.require(
                            !iv.overlaps(&gb.window),
                            "gates",
                            format!(
                                "{det_id}: the {side} side band of {} [{:.4}, {:.4}) MeV overlaps the window of {}",
                                ga.state, iv.low_mev, iv.high_mev, gb.state
                            ),
                            "side bands clear of every peak window (narrower side bands or a larger gap)",
                        );
                    }
                }
            }
            let pid = self.pid.get(&det_id).or_else(|| self.pid.get("all")).cloned();
            if let Some(poly) = &pid {
                if let Some(why) = polygon_problem(poly) {
                    c.require(false, &format!("pid.{det_id}"), why, "a simple polygon of at least 3 vertices");
                }
                c.require(self.columns.delta_e.is_some(), "columns.delta_e", "missing", "a ΔE column for PID polygons");
            }
            detectors.push(DetectorPlan { id: det_id, cal, gates, pid });
        }
        if !c.problems.is_empty() {
            return Err(c.problems);
        }
        // Category per channel: 0 outside, 1 + 2k window of state k, 2 + 2k side band of k.
        let mut categories = vec![0u8; detectors.len() * n_ch];
        for (d, det) in detectors.iter().enumerate() {
            for ch in 0..n_ch {
                categories[d * n_ch + ch] = category(det, det.cal.energy_mev(ch as f64));
            }
        }
        Ok(RawPlan { config: self.clone(), detectors, states, categories, n_channels: n_ch })
    }
}

fn category(det: &DetectorPlan, e: f64) -> u8 {
    if let Some((si, _)) = det.gates.iter().find(|(_, g)| g.window.contains(e)) {
        return (1 + 2 * si) as u8;
    }
    det.gates.iter().find(|(_, g)| g.left.contains(e) || g.right.contains(e)).map_or(0, |(si, _)| (2 + 2 * si) as u8)
}

impl RawPlan {
    /// The detector ids, in config order (the index an event's detector maps to).
    pub fn detector_ids(&self) -> Vec<&str> {
        self.detectors.iter().map(|d| d.id.as_str()).collect()
    }

    /// Channels per spectrum (the overflow channel).
    pub fn n_channels(&self) -> usize {
        self.n_channels
    }

    /// The index of a detector value in the files (after `detector_ids`), or
    /// [`UNKNOWN_DETECTOR`].
    pub fn detector_index(&self, value: &str) -> u16 {
        let id = self.config.detector_ids.get(value).map_or(value, String::as_str);
        self.detectors.iter().position(|d| d.id == id).map_or(UNKNOWN_DETECTOR, |i| i as u16)
    }

    /// The energy of every channel of detector `d`, MeV.
    pub fn channel_energies_mev(&self, d: usize) -> Vec<f64> {
        (0..self.n_channels).map(|c| self.detectors[d].cal.energy_mev(c as f64)).collect()
    }

    /// The gates used, per detector and state.
    pub fn gates(&self) -> Vec<Gate> {
        self.detectors.iter().flat_map(|d| d.gates.iter().map(|(_, g)| g.clone())).collect()
    }

    /// A new, empty accumulator.
    pub fn accumulator(&self) -> Accumulator<'_> {
        let n = self.detectors.len();
        let ncat = 1 + 2 * self.states.len();
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
    /// Counts in the peak window.
    pub counts_gross: f64,
    /// Background under the peak.
    pub counts_background: f64,
    /// Its standard uncertainty.
    pub counts_background_err: f64,
}

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
    /// Per state, its fitted peak.
    pub peaks: Vec<FittedPeak>,
    /// Per state, the counts in the peak window.
    pub window_counts: Vec<f64>,
}

/// One state's peak in a peak fit.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FittedPeak {
    /// State name.
    pub state: String,
    /// Centroid, MeV.
    pub centroid_mev: f64,
    /// Width (standard deviation), MeV.
    pub width_mev: f64,
    /// Area in counts.
    pub area: f64,
    /// Its standard uncertainty.
    pub area_err: f64,
}

/// What one run's raw data gave.
#[derive(Debug, Clone, PartialEq)]
pub struct RawResult {
    /// The yields table rows, detectors in config order, states in config order.
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

/// Fewest counts in a detector's fit region for a peak fit; below it the side bands serve.
pub const PEAK_FIT_MIN_COUNTS: f64 = 50.0;

impl Accumulator<'_> {
    /// Add events with integer ADC channels (the fast path). `detector` holds detector
    /// indices ([`RawPlan::detector_index`], [`UNKNOWN_DETECTOR`] for unknown ones);
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
    pub fn add_spectrum_row(&mut self, detector: u16, channel: f64, counts: f64) -> Result<(), String> {
        if !(counts.is_finite() && counts >= 0.0 && counts.fract() == 0.0) {
            return Err(format!("counts {counts}: expected a whole number ≥ 0"));
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
        let ncat = 1 + 2 * plan.states.len();
        self.direct[d * ncat + category(dp, e) as usize] += 1;
        self.hist_direct[d * n_ch + ch as usize] += 1;
    }

    /// The yields, tallies and spectra.
    pub fn finish(mut self) -> RawResult {
        let plan = self.plan;
        let (n_ch, ns) = (plan.n_channels, plan.states.len());
        let ncat = 1 + 2 * ns;
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
            for k in 0..ns {
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
            for (si, g) in &det.gates {
                let gross = counts[d * ncat + 1 + 2 * si] as f64;
                let side = counts[d * ncat + 2 + 2 * si] as f64;
                let (gross, bg, bg_err) = match &fitted {
                    Some(f) => {
                        // The fitted area N ± σ_N becomes gross = N, background 0 ± √(σ_N² − N),
                        // so that the later net-count error √(gross + σ_bg²) is σ_N (or √N
                        // when the fit's error is below Poisson's). The window sum is in the
                        // peak-fit record.
                        let (n, e) =
                            f.peaks.iter().find(|p| p.state == g.state).map_or((0.0, 0.0), |p| (p.area, p.area_err));
                        (n, 0.0, (e * e - n).max(0.0).sqrt())
                    }
                    None => {
                        let scale = g.window.width() / (g.left.width() + g.right.width());
                        (gross, side * scale, side.sqrt() * scale)
                    }
                };
                yields.push(YieldRow {
                    detector: det.id.clone(),
                    state: g.state.clone(),
                    counts_gross: gross,
                    counts_background: bg,
                    counts_background_err: bg_err,
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

/// Fit every state of one detector at once: Gaussians on a background over the region from
/// the lowest side band to the highest, bins = channels.
fn fit_detector(
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
                centroid_mev: p.centroid,
                width_mev: p.width,
                area: p.area,
                area_err: p.area_err,
            })
            .collect(),
    })
}
