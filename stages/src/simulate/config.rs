//! What a simulation is asked for besides the experiment config: the seed, the number of
//! runs and of events, the run's length, the acquisition's dead time, the background, and
//! the true cross section of each state. Checked once; a problem names the command-line
//! flag, the value and what is accepted.

use crate::problem::Checks;
use crate::theory::ModelConfig;
use crate::Problem;

/// Most events a run may have: 2^40 (about 1.1e12; a list-mode file of that size is
/// several terabytes).
pub const MAX_EVENTS: u64 = 1 << 40;

/// Most runs one simulation may write (run ids are `sim0001` to `sim9999`).
pub const MAX_RUNS: u32 = 9999;

/// How the simulated acquisition loses events while it is busy.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum DeadTimeModel {
    /// Each recorded event blocks the system for τ; events meanwhile are lost.
    NonParalyzable,
    /// Every arriving event, recorded or not, extends the blocked time to τ after it.
    Paralyzable,
}

/// The true CM cross section of one state.
#[derive(Debug, Clone)]
pub enum StateTruth {
    /// A model file of `xsflow theory`, evaluated at each peak's CM angle.
    Model(Box<ModelConfig>),
    /// The same dσ/dΩ_cm at every angle, mb/sr.
    Constant(f64),
}

/// The settings of one simulation.
#[derive(Debug, Clone)]
pub struct SimulateOptions {
    /// Seed of the random numbers; each run takes its own stream from it.
    pub seed: u64,
    /// How many runs, 1 to [`MAX_RUNS`].
    pub runs: u32,
    /// Expected events arriving at the detectors in one run (peaks and background, before
    /// dead time), 1 to [`MAX_EVENTS`]; the beam charge follows from it.
    pub events: f64,
    /// Length of each run (real time), s; > 0.
    pub real_time_s: f64,
    /// The dead-time model of the acquisition.
    pub dead_time: DeadTimeModel,
    /// Its resolving time, µs; >= 0.
    pub resolving_time_us: f64,
    /// A flat background in every detector: its expected counts over all channels as a
    /// fraction of the detector's expected peak counts; >= 0 (raw data only).
    pub background_fraction: f64,
    /// Rate of the pulser fed into the acquisition, 1/s; > 0.
    pub pulser_rate_per_s: f64,
}

impl SimulateOptions {
    /// Every problem of the settings, keyed by their command-line flags.
    pub fn validate(&self) -> Vec<Problem> {
        let mut c = Checks::default();
        c.require(
            (1..=MAX_RUNS).contains(&self.runs),
            "--runs",
            self.runs,
            &format!("a whole number of runs from 1 to {MAX_RUNS}"),
        );
        c.require(
            self.events.fract() == 0.0 && self.events >= 1.0 && self.events <= MAX_EVENTS as f64,
            "--events",
            self.events,
            &format!("a whole number of events per run from 1 to 2^40 = {MAX_EVENTS}"),
        );
        c.positive("--real-time-s", self.real_time_s);
        c.non_negative("--resolving-time-us", self.resolving_time_us);
        c.non_negative("--background-fraction", self.background_fraction);
        c.positive("--pulser-rate-per-s", self.pulser_rate_per_s);
        c.problems
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn bad_settings_name_their_flag_and_what_is_accepted() {
        let good = SimulateOptions {
            seed: 1,
            runs: 2,
            events: 1e6,
            real_time_s: 3600.0,
            dead_time: DeadTimeModel::Paralyzable,
            resolving_time_us: 2.0,
            background_fraction: 0.01,
            pulser_rate_per_s: 10.0,
        };
        assert!(good.validate().is_empty());
        // (what is changed, the key of the one problem, a part of what is expected)
        type Change = fn(&mut SimulateOptions);
        let cases: [(Change, &str, &str); 6] = [
            (|o| o.runs = 0, "--runs", "from 1 to 9999"),
            (|o| o.events = 2f64.powi(40) + 1.0, "--events", "2^40 = 1099511627776"),
            (|o| o.events = 0.0, "--events", "from 1"),
            (|o| o.events = 10.5, "--events", "a whole number"),
            (|o| o.real_time_s = 0.0, "--real-time-s", "> 0"),
            (|o| o.background_fraction = -1.0, "--background-fraction", ">= 0"),
        ];
        for (change, key, expected) in cases {
            let mut o = good.clone();
            change(&mut o);
            let p = o.validate();
            assert_eq!(p.len(), 1, "{key}: {p:?}");
            assert_eq!(p[0].key, key);
            assert!(p[0].expected.contains(expected), "{key}: {}", p[0].expected);
        }
    }
}
