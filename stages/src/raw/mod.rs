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
//! relativistic two-body energy of the detected particle at the detector's angle, without
//! energy loss in the target or a dead layer (put that in the calibration). Where the angle
//! is double valued (a heavy beam on a lighter target), each state gets one gate per
//! kinematic branch, and its yields row carries the `branch`.
//!
//! `config.rs` holds the section as written, `plan.rs` the checked plan (calibrations, gates,
//! channel categories), `accumulate.rs` the tallies and histograms of one run, `peaks.rs`
//! the peak-fit background; the polygon test is [`crate::physics::polygon`].

mod accumulate;
mod config;
mod peaks;
mod plan;

pub use accumulate::{Accumulator, BadCount, RawResult, Tally, YieldRow, PID_BINS};
pub use config::{
    BackgroundMethod, CalibrationConfig, EventColumns, GatesConfig, LowEnergyTailConfig, RawConfig, SpectrumColumns,
    WindowConfig,
};
pub use peaks::{FittedPeak, PeakFitRecord, PeakFitSkipped, PEAK_FIT_MIN_COUNTS};
pub use plan::{Gate, Interval, RawPlan, MAX_CHANNELS, UNKNOWN_DETECTOR};

/// Helpers for the unit tests of this folder.
#[cfg(test)]
pub(crate) mod testing {
    use super::RawConfig;

    /// A `raw:` section with calibration E = 0.125 MeV × channel (exact in binary, so the
    /// bins of a region are counted exactly) and one written window for `elastic` with its
    /// side bands; `background` the method.
    pub fn raw(window: &str, background: &str) -> RawConfig {
        serde_yaml::from_str(&format!(
            "{{ columns: {{ detector: det, energy: adc }}, overflow_channel: 1024,
               calibration: {{ all: {{ offset_mev: 0.0, gain_mev_per_channel: 0.125 }} }},
               gates: {{ resolution_mev: 0.1, windows: [{{ detector: A, state: elastic, {window} }}] }},
               background: {background} }}"
        ))
        .expect("the case parses")
    }
}
