//! The `raw:` section of a config as written: the column names of event and spectrum
//! files, the energy calibration per detector, the gates (automatic and written windows),
//! the PID polygons and the background method. [`RawConfig::build`](super::RawConfig::build)
//! (in `plan.rs`) checks it against the set-up; nothing here reads data.

use std::collections::BTreeMap;

use schemars::JsonSchema;
use serde::{Deserialize, Serialize};

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
    /// The channel whose energy is `energy_mev`: the root of q c² + g c + e₀ − E = 0 on the
    /// rising branch, written 2(E − e₀)/(g + √(g² + 4q(E − e₀))) so that it holds for q = 0
    /// without cancellation (W. H. Press et al., Numerical Recipes, 3rd ed. (2007), Eq.
    /// 5.6.4–5.6.5); where no real root exists, 2(E − e₀)/g (a starting point only).
    pub fn channel_of(&self, energy_mev: f64) -> f64 {
        let (g, q, d) = (self.gain_mev_per_channel, self.quadratic_mev_per_channel2, energy_mev - self.offset_mev);
        2.0 * d / (g + (g * g + 4.0 * q * d).max(0.0).sqrt())
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
    /// Kinematic branch where the detector sees the state at two energies (a heavy beam on
    /// a lighter target): 1 for the higher-energy peak, 2 for the lower. Needed there;
    /// default 1 elsewhere.
    #[serde(default)]
    pub branch: Option<u8>,
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
    /// Where the peak sits, MeV, when not in the middle of the window: the window's
    /// acceptance is computed for a Gaussian centred here (default: the window's middle).
    #[serde(default)]
    pub peak_centroid_mev: Option<f64>,
}

/// Gates: automatic windows around the kinematic energies, and written ones.
#[derive(Debug, Clone, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct GatesConfig {
    /// Peak resolution σ in MeV (standard deviation); > 0.
    pub resolution_mev: f64,
    /// Standard uncertainty of the resolution σ in MeV (default 0); it gives the
    /// uncertainty of each window's acceptance (`window_acceptance_err`).
    #[serde(default)]
    pub resolution_err_mev: f64,
    /// A low-energy tail of the peaks, if the detectors show one; the window acceptance
    /// then includes it. Used with `background: side_bands` only.
    #[serde(default)]
    pub low_energy_tail: Option<LowEnergyTailConfig>,
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

/// A low-energy tail: a fraction of each peak's counts in the Gaussian convolved with an
/// exponential towards low energy
/// ([`peak_acceptance`](crate::physics::peak_acceptance)).
#[derive(Debug, Clone, Copy, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct LowEnergyTailConfig {
    /// Fraction of the counts in the tail, in [0, 1).
    pub fraction: f64,
    /// Mean length of the exponential in MeV; > 0.
    pub length_mev: f64,
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
