//! The checked `raw:` section for one set-up: [`RawConfig::build`] resolves every
//! detector's calibration, places its gates (around the kinematic energy of each state, or
//! where written), checks the PID polygons, and precomputes the gate category of every ADC
//! channel. The resulting [`RawPlan`] is built once per set-up, before any run is read;
//! `accumulate.rs` then sorts each run's events with it.

use serde::Serialize;

use crate::physics::kinematics::{Mode, Solution};
use crate::physics::peak_acceptance::{window_acceptance, LowEnergyTail, PeakShape, WindowLayout};
use crate::physics::polygon::polygon_problem;
use crate::problem::Checks;
use crate::{Problem, Setup};

use super::{BackgroundMethod, CalibrationConfig, GatesConfig, RawConfig, WindowConfig};

/// A gate's [low, high) interval in MeV: the physics' energy interval.
pub use crate::physics::peak_acceptance::EnergyInterval as Interval;

impl Interval {
    fn new(a: [f64; 2]) -> Self {
        Interval { low_mev: a[0], high_mev: a[1] }
    }
    pub(super) fn contains(&self, e: f64) -> bool {
        self.low_mev <= e && e < self.high_mev
    }
    fn overlaps(&self, o: &Interval) -> bool {
        self.low_mev < o.high_mev && o.low_mev < self.high_mev
    }
}

/// The gates of one detector and state, as used (recorded with the spectra).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Gate {
    /// Detector id.
    pub detector: String,
    /// State.
    pub state: String,
    /// Kinematic branch: 1, or 2 for the lower-energy peak where the detector's lab angle
    /// is double valued.
    pub branch: u8,
    /// Kinematic energy, MeV (automatic windows are centred on it).
    pub energy_kinematic_mev: f64,
    /// Peak window.
    pub window: Interval,
    /// Left side band.
    pub left: Interval,
    /// Right side band.
    pub right: Interval,
    /// The fraction of a Gaussian peak of the configured resolution, centred on the
    /// window's middle (or a written window's `peak_centroid_mev`), that survives the
    /// window and the side-band subtraction
    /// ([`window_acceptance`](crate::physics::peak_acceptance::window_acceptance)).
    pub window_acceptance: f64,
    /// Its standard uncertainty, from `resolution_err_mev`.
    pub window_acceptance_err: f64,
    /// The peak shape the acceptance is computed for.
    #[serde(skip)]
    pub(super) peak: PeakShape,
}

impl Gate {
    /// The state's name, with the branch where it is the second (lower-energy) peak.
    pub fn name(&self) -> String {
        state_label(&self.state, self.branch)
    }
}

/// A state's name, with the branch where it is the second (lower-energy) peak.
fn state_label(state: &str, branch: u8) -> String {
    if branch == 1 {
        state.to_string()
    } else {
        format!("{state} (branch {branch})")
    }
}

/// One detector's plan.
#[derive(Debug, Clone)]
pub(super) struct DetectorPlan {
    pub(super) id: String,
    pub(super) cal: CalibrationConfig,
    pub(super) gates: Vec<(usize, Gate)>,
    pub(super) pid: Option<Vec<[f64; 2]>>,
    /// Kinematic energies, MeV, of the peaks of the foil's impurities in this detector
    /// (`target.contaminants`): a peak fit fits those inside its region as well.
    pub(super) impurity_mev: Vec<f64>,
}

/// A checked `raw:` section for one set-up.
#[derive(Debug, Clone)]
pub struct RawPlan {
    /// The section.
    pub config: RawConfig,
    pub(super) detectors: Vec<DetectorPlan>,
    /// Per detector, per channel: the category index (see `category`).
    pub(super) categories: Vec<u16>,
    /// Categories per detector: 1 + 2 × the most gates of any detector.
    pub(super) n_categories: usize,
    pub(super) n_channels: usize,
}

/// The largest `overflow_channel`: spectra are held as one histogram per detector, so the
/// channel count bounds the memory (2^20 channels, 8 MB per detector).
pub const MAX_CHANNELS: u32 = 1 << 20;

/// Marks an event whose detector value is not a known detector.
pub const UNKNOWN_DETECTOR: u16 = u16::MAX;

impl WindowConfig {
    /// One interval given in MeV or in channels (converted by `cal`), if given.
    fn interval(mev: Option<[f64; 2]>, channels: Option<[f64; 2]>, cal: &CalibrationConfig) -> Option<Interval> {
        mev.map(Interval::new).or_else(|| channels.map(|[a, b]| Interval::new([cal.energy_mev(a), cal.energy_mev(b)])))
    }
}

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
        c.non_negative("gates.resolution_err_mev", g.resolution_err_mev);
        if let Some(t) = g.low_energy_tail {
            c.require(
                (0.0..1.0).contains(&t.fraction),
                "gates.low_energy_tail.fraction",
                t.fraction,
                "a fraction of the counts in [0, 1)",
            );
            c.positive("gates.low_energy_tail.length_mev", t.length_mev);
            c.require(
                self.background == BackgroundMethod::SideBands,
                "gates.low_energy_tail",
                "a tail with a peak-fit background",
                "background: side_bands (the peak fit has Gaussian peaks only)",
            );
        }
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
            if let Some(e) = w.peak_centroid_mev {
                c.require(e.is_finite(), &format!("{key}.peak_centroid_mev"), e, "a finite energy in MeV");
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
            // Windows placed with a falling calibration or a resolution <= 0 fail for every
            // state; the problem already reported is the one to fix, so they are not tried.
            let placeable = rising && g.resolution_mev.is_finite() && g.resolution_mev > 0.0;
            let states_to_gate = if placeable { states.as_slice() } else { &[] };
            for (si, state) in states_to_gate.iter().enumerate() {
                let solutions = setup.resolved.as_ref().map_or_else(Vec::new, |r| {
                    r.channel(state).map_or_else(Vec::new, |ch| {
                        ch.at_lab_angle(det.theta_lab_deg.to_radians(), r.detect, Mode::Relativistic)
                    })
                });
                let written: Vec<(usize, &WindowConfig)> =
                    g.windows.iter().enumerate().filter(|(_, w)| w.detector == det_id && &w.state == state).collect();
                for (branch, e_kin) in branches_to_gate(&det_id, state, &solutions, &written, &mut c) {
                    let w = written.iter().find(|(_, w)| w.branch.unwrap_or(1) == branch).map(|(_, w)| *w);
                    let gate = GatePlace { det: &det_id, state, branch, energy_kinematic_mev: e_kin };
                    if let Some(gate) = gate.place(g, &cal, n_ch, w, &mut c) {
                        gates.push((si, gate));
                    }
                }
            }
            for (a, (_, ga)) in gates.iter().enumerate() {
                for (_, gb) in &gates[a + 1..] {
                    c.require(
                        g.allow_overlap || !ga.window.overlaps(&gb.window),
                        "gates",
                        format!(
                            "{det_id}: windows of {} [{:.4}, {:.4}) and {} [{:.4}, {:.4}) MeV overlap",
                            ga.name(),
                            ga.window.low_mev,
                            ga.window.high_mev,
                            gb.name(),
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
                                "{det_id}: the {side} side band of {} [{:.4}, {:.4}) MeV (whole channels) overlaps the window of {}",
                                ga.name(),
                                iv.low_mev,
                                iv.high_mev,
                                gb.name()
                            ),
                            "side bands clear of every peak window (narrower side bands or a larger gap)",
                        );
                    }
                }
            }
            warn_of_neighbours(&gates);
            let pid = self.pid.get(&det_id).or_else(|| self.pid.get("all")).cloned();
            if let Some(poly) = &pid {
                if let Some(why) = polygon_problem(poly) {
                    c.require(false, &format!("pid.{det_id}"), why, "a simple polygon of at least 3 vertices");
                }
                c.require(self.columns.delta_e.is_some(), "columns.delta_e", "missing", "a ΔE column for PID polygons");
            }
            let impurity_mev = setup.resolved.as_ref().map_or_else(Vec::new, |r| {
                r.impurity_channels(setup.reaction.energy_mev, &setup.target.contaminants)
                    .iter()
                    .flat_map(|(_, _, ch)| {
                        ch.at_lab_angle(det.theta_lab_deg.to_radians(), r.detect, Mode::Relativistic)
                    })
                    .map(|s| s.energy_lab_mev)
                    .collect()
            });
            detectors.push(DetectorPlan { id: det_id, cal, gates, pid, impurity_mev });
        }
        if !c.problems.is_empty() {
            return Err(c.problems);
        }
        // Category per channel: 0 outside, 1 + 2k window of the detector's gate k, 2 + 2k
        // side band of gate k.
        let n_categories = 1 + 2 * detectors.iter().map(|d| d.gates.len()).max().unwrap_or(0);
        if n_categories > usize::from(u16::MAX) {
            return Err(vec![Problem::new(
                "gates",
                format!("{} gates on one detector", (n_categories - 1) / 2),
                format!("at most {} states and branches per detector", u16::MAX / 2),
            )]);
        }
        let mut categories = vec![0u16; detectors.len() * n_ch];
        for (d, det) in detectors.iter().enumerate() {
            for ch in 0..n_ch {
                categories[d * n_ch + ch] = category(det, det.cal.energy_mev(ch as f64));
            }
        }
        Ok(RawPlan { config: self.clone(), detectors, categories, n_categories, n_channels: n_ch })
    }
}

/// The kinematic branches of one state at one detector that get a gate, with their
/// kinematic energies: every solution of the kinematics (two where the lab angle is double
/// valued), and a written window's branch where the kinematics has none. Checks the written
/// windows' `branch`: needed where the angle is double valued, 2 only there, one window per
/// branch.
fn branches_to_gate(
    det_id: &str,
    state: &str,
    solutions: &[Solution],
    written: &[(usize, &WindowConfig)],
    c: &mut Checks,
) -> Vec<(u8, Option<f64>)> {
    let mut branches: Vec<(u8, Option<f64>)> = solutions.iter().map(|s| (s.branch, Some(s.energy_lab_mev))).collect();
    for (n, (i, w)) in written.iter().enumerate() {
        let key = format!("gates.windows[{i}].branch");
        match (w.branch, solutions) {
            (None, [one, two]) => c.require(
                false,
                &key,
                "missing",
                &format!(
                    "branch 1 or 2: detector {det_id} sees state {state} at {:.4} MeV (branch 1) and {:.4} MeV (branch 2)",
                    one.energy_lab_mev, two.energy_lab_mev
                ),
            ),
            (Some(b), _) if !(b == 1 || (b == 2 && solutions.len() == 2)) => c.require(
                false,
                &key,
                b,
                if solutions.len() == 2 { "1 or 2" } else { "1 (this angle is single valued)" },
            ),
            _ => {}
        }
        let branch = w.branch.unwrap_or(1);
        if let Some((first, _)) = written[..n].iter().find(|(_, o)| o.branch.unwrap_or(1) == branch) {
            c.require(
                false,
                &format!("gates.windows[{i}]"),
                format!("detector {det_id}, state {state}, branch {branch} again (first at gates.windows[{first}])"),
                "one written window per detector, state and branch",
            );
        }
        if !branches.iter().any(|(b, _)| *b == branch) {
            branches.push((branch, None));
        }
    }
    branches
}

/// Fraction of one peak's counts above which its share in another gate's net counts is
/// reported: 10⁻⁴, a tenth of the statistical error at a million counts.
const NEIGHBOUR_SHARE_WARNING: f64 = 1e-4;

/// Warn where a peak's width or tail reaches another gate of the same detector: its share
/// A_jk (the acceptance of gate j for peak k, same formula) goes into that gate's net counts
/// uncorrected.
fn warn_of_neighbours(gates: &[(usize, Gate)]) {
    for (_, gj) in gates {
        for (_, gk) in gates.iter().filter(|(_, gk)| gk != gj) {
            let layout = WindowLayout { window: gj.window, left: gj.left, right: gj.right };
            let share = window_acceptance(&layout, &gk.peak).value;
            if share.abs() > NEIGHBOUR_SHARE_WARNING {
                tracing::warn!(
                    detector = %gj.detector,
                    "{:.3} % of the counts of the {} peak fall in the net counts of {} (not corrected): move the gates apart, or fit the peaks",
                    100.0 * share,
                    gk.name(),
                    gj.name()
                );
            }
        }
    }
}

/// The channels whose energy E(c) lies in `iv`, as the energy interval they cover, or None
/// when no channel of the spectrum does. Channel c holds the energies [E(c − ½), E(c + ½)):
/// a calibration fitted to peak centroids gives each channel's centre (common practice), so
/// a gate of whole channels c₁…c₂ covers [E(c₁ − ½), E(c₂ + ½)), and its widths and window
/// acceptance are those of that interval.
fn snap_to_channels(iv: Interval, cal: &CalibrationConfig, n_ch: usize) -> Option<Interval> {
    let top = n_ch as f64 - 1.0;
    let e = |c: f64| cal.energy_mev(c);
    // The first channel at or above the low edge and the last below the high edge; the
    // loops settle round-off in the inverse calibration.
    let mut first = cal.channel_of(iv.low_mev).ceil().clamp(0.0, top + 1.0);
    while first > 0.0 && e(first - 1.0) >= iv.low_mev {
        first -= 1.0;
    }
    while first <= top && e(first) < iv.low_mev {
        first += 1.0;
    }
    let mut last = (cal.channel_of(iv.high_mev).ceil() - 1.0).clamp(-1.0, top);
    while last < top && e(last + 1.0) < iv.high_mev {
        last += 1.0;
    }
    while last >= 0.0 && e(last) >= iv.high_mev {
        last -= 1.0;
    }
    (first <= last).then(|| Interval { low_mev: e(first - 0.5), high_mev: e(last + 0.5) })
}

/// Where one gate goes: a detector, a state and its branch, at its kinematic energy (none
/// when only a written window places it).
struct GatePlace<'a> {
    det: &'a str,
    state: &'a str,
    branch: u8,
    energy_kinematic_mev: Option<f64>,
}

impl GatePlace<'_> {
    /// The gate: the written window where there is one, else the automatic window around
    /// the kinematic energy, with side bands by the automatic rule unless written, and the
    /// window's acceptance. None when there is neither.
    fn place(
        &self,
        g: &GatesConfig,
        cal: &CalibrationConfig,
        n_ch: usize,
        written: Option<&WindowConfig>,
        c: &mut Checks,
    ) -> Option<Gate> {
        let (s, wr, gap, bw) =
            (g.resolution_mev, g.window_resolutions, g.side_band_gap_resolutions, g.side_band_width_resolutions);
        let written_window = written.and_then(|w| WindowConfig::interval(w.window_mev, w.window_channels, cal));
        let nominal = match (written_window, self.energy_kinematic_mev) {
            (Some(w), _) => w,
            (None, Some(e)) => Interval { low_mev: e - wr * s, high_mev: e + wr * s },
            (None, None) => return None,
        };
        let left = written
            .and_then(|w| WindowConfig::interval(w.left_mev, w.left_channels, cal))
            .unwrap_or(Interval { low_mev: nominal.low_mev - (gap + bw) * s, high_mev: nominal.low_mev - gap * s });
        let right = written
            .and_then(|w| WindowConfig::interval(w.right_mev, w.right_channels, cal))
            .unwrap_or(Interval { low_mev: nominal.high_mev + gap * s, high_mev: nominal.high_mev + (gap + bw) * s });
        let name = state_label(self.state, self.branch);
        let spectrum = format!("[{:.4}, {:.4}) MeV", cal.energy_mev(-0.5), cal.energy_mev(n_ch as f64 - 0.5));
        let Some(window) = snap_to_channels(nominal, cal, n_ch) else {
            c.require(
                false,
                "gates",
                format!(
                    "{}, {name}: the window [{:.4}, {:.4}) MeV holds no channel of the spectrum {spectrum}",
                    self.det, nominal.low_mev, nominal.high_mev
                ),
                "a window inside the spectrum (check the calibration, overflow_channel and the states)",
            );
            return None;
        };
        let empty = |at: f64| Interval { low_mev: at, high_mev: at };
        let left = snap_to_channels(left, cal, n_ch).unwrap_or(empty(window.low_mev));
        let right = snap_to_channels(right, cal, n_ch).unwrap_or(empty(window.high_mev));
        c.require(
            left.width_mev() + right.width_mev() > 0.0,
            "gates",
            format!("{}, {name}: no side-band channel inside the spectrum {spectrum}", self.det),
            "side bands that hold at least one channel",
        );
        let peak = PeakShape {
            // The kinematic energy for an automatic window (its middle before the snap to
            // whole channels), the written window's middle or its `peak_centroid_mev`.
            centroid_mev: written
                .and_then(|w| w.peak_centroid_mev)
                .unwrap_or(0.5 * (nominal.low_mev + nominal.high_mev)),
            sigma_mev: s,
            sigma_err_mev: g.resolution_err_mev,
            tail: g.low_energy_tail.map(|t| LowEnergyTail { fraction: t.fraction, length_mev: t.length_mev }),
        };
        let layout = WindowLayout { window, left, right };
        let acceptance = window_acceptance(&layout, &peak);
        c.require(
            acceptance.value > 0.0,
            "gates",
            format!(
                "{}, {name}: window acceptance {:.4} (the side bands hold more of the peak than the window)",
                self.det, acceptance.value
            ),
            "a window around the peak with side bands clear of it",
        );
        Some(Gate {
            detector: self.det.to_string(),
            state: self.state.to_string(),
            branch: self.branch,
            energy_kinematic_mev: self.energy_kinematic_mev.unwrap_or(f64::NAN),
            window,
            left,
            right,
            window_acceptance: acceptance.value,
            window_acceptance_err: acceptance.err,
            peak,
        })
    }
}

/// The category of energy `e` in a detector: 0 outside every gate, 1 + 2k in the window of
/// gate k, 2 + 2k in a side band of gate k (windows first, gates in order).
pub(super) fn category(det: &DetectorPlan, e: f64) -> u16 {
    if let Some(k) = det.gates.iter().position(|(_, g)| g.window.contains(e)) {
        return (1 + 2 * k) as u16;
    }
    det.gates.iter().position(|(_, g)| g.left.contains(e) || g.right.contains(e)).map_or(0, |k| (2 + 2 * k) as u16)
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

    /// The calibration of detector `d` (config order).
    pub fn calibration(&self, d: usize) -> &CalibrationConfig {
        &self.detectors[d].cal
    }

    /// The energy of every channel of detector `d`, MeV.
    pub fn channel_energies_mev(&self, d: usize) -> Vec<f64> {
        (0..self.n_channels).map(|c| self.detectors[d].cal.energy_mev(c as f64)).collect()
    }

    /// The gates used, per detector and state.
    pub fn gates(&self) -> Vec<Gate> {
        self.detectors.iter().flat_map(|d| d.gates.iter().map(|(_, g)| g.clone())).collect()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn cal(offset_mev: f64, gain: f64, quadratic: f64) -> CalibrationConfig {
        CalibrationConfig {
            offset_mev,
            gain_mev_per_channel: gain,
            quadratic_mev_per_channel2: quadratic,
            offset_err_mev: 0.0,
            gain_err_mev_per_channel: 0.0,
        }
    }

    #[test]
    fn the_inverse_calibration_gives_back_the_channel() {
        // (calibration, channel): E(c) then c(E) returns c (1e-9 channel: round-off of the
        // square root for channels up to 4000).
        let cases = [(cal(0.05, 0.01, 0.0), 2000.0), (cal(-0.3, 0.02, 1e-6), 3999.5), (cal(1.0, 0.01, -1e-7), 17.25)];
        for (c, ch) in cases {
            assert!((c.channel_of(c.energy_mev(ch)) - ch).abs() < 1e-9, "{c:?} {ch}");
        }
    }

    #[test]
    fn gates_snap_to_whole_channels() {
        // E(c) = 0.01 c MeV, 4096 channels. (interval, snapped or None), worked by hand:
        // the channels whose E(c) lies in [low, high), widened by half a channel each side.
        let c = cal(0.0, 0.01, 0.0);
        let iv = |low_mev: f64, high_mev: f64| Interval { low_mev, high_mev };
        let cases = [
            (iv(20.0, 21.0), Some(iv(19.995, 20.995))),     // channels 2000..=2099
            (iv(20.003, 20.997), Some(iv(20.005, 20.995))), // 2001..=2099
            (iv(20.001, 20.009), None),                     // no channel centre inside
            (iv(-5.0, 0.015), Some(iv(-0.005, 0.015))),     // clipped at channel 0
            (iv(40.9, 99.0), Some(iv(40.895, 40.955))),     // clipped at channel 4095
            (iv(50.0, 60.0), None),                         // beyond the spectrum
        ];
        for (nominal, expected) in cases {
            let got = snap_to_channels(nominal, &c, 4096);
            match (got, expected) {
                // 1e-9 MeV: round-off of E(c) = 0.01 c.
                (Some(a), Some(b)) => assert!(
                    (a.low_mev - b.low_mev).abs() < 1e-9 && (a.high_mev - b.high_mev).abs() < 1e-9,
                    "{nominal:?}: {a:?}"
                ),
                (a, b) => assert_eq!(a, b, "{nominal:?}"),
            }
        }
    }
}
