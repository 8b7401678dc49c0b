//! One run's record (the YAML file of a run): its data file, beam charge, clocks and
//! scalers, as written, with its range and consistency checks. Read per run, after the
//! config; the dead-time and normalisation stages take their numbers from it.

use std::collections::BTreeMap;

use schemars::JsonSchema;
use serde::Deserialize;

use super::Id;
use crate::problem::Checks;
use crate::Problem;

/// How the integrated beam charge of a run was recorded.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Charge {
    /// Charge in coulomb.
    Coulomb(f64),
    /// Counts of a current integrator and its scale in C per count.
    Integrator {
        /// Integrator counts.
        counts: f64,
        /// Coulomb per count.
        scale_c_per_count: f64,
    },
}

/// The record of one run: its yields file, beam charge, clocks and scalers. Any subset of
/// the clocks and scalers may be given; the dead-time stage names what it needs.
#[derive(Debug, Clone, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct RunRecord {
    /// Run identifier (a string or a whole number), unique among the runs of a config.
    pub run: Id,
    /// The run's yields table (CSV or Parquet), relative to this file; or give
    /// `events_file` or `spectra_file` instead (exactly one of the three).
    #[serde(default)]
    pub yields_file: Option<String>,
    /// The run's list-mode events (Parquet, Arrow IPC or CSV), reduced to yields by the
    /// config's `raw:` section.
    #[serde(default)]
    pub events_file: Option<String>,
    /// The run's spectra (detector, channel, counts; Parquet, Arrow IPC or CSV), reduced to
    /// yields by the config's `raw:` section.
    #[serde(default)]
    pub spectra_file: Option<String>,
    /// Integrated beam charge in C; give this or the integrator pair; > 0.
    #[serde(default)]
    pub charge_c: Option<f64>,
    /// Current-integrator counts for the run; with `integrator_scale_c_per_count`; > 0.
    #[serde(default)]
    pub integrator_counts: Option<f64>,
    /// Charge per integrator count in C; with `integrator_counts`; > 0.
    #[serde(default)]
    pub integrator_scale_c_per_count: Option<f64>,
    /// Live time of the acquisition (busy-vetoed clock) in s; <= `real_time_s`.
    #[serde(default)]
    pub live_time_s: Option<f64>,
    /// Real (elapsed) time of the run in s; > 0.
    #[serde(default)]
    pub real_time_s: Option<f64>,
    /// Pulser signals sent into the electronics during the run; > 0.
    #[serde(default)]
    pub pulser_sent: Option<u64>,
    /// Pulser signals recorded by the acquisition; <= `pulser_sent`.
    #[serde(default)]
    pub pulser_recorded: Option<u64>,
    /// Triggers counted by a free-running scaler (raw); > 0.
    #[serde(default)]
    pub triggers_raw: Option<u64>,
    /// Triggers accepted by the acquisition; <= `triggers_raw`.
    #[serde(default)]
    pub triggers_accepted: Option<u64>,
    /// Recorded event rate in 1/s for the dead-time models; default
    /// `triggers_accepted / real_time_s`.
    #[serde(default)]
    pub recorded_rate_per_s: Option<f64>,
    /// The arms' settings in this run, degrees by arm name (`{ left: 35.0 }`); an arm not
    /// named stands at its config angle. Its detectors turn with it (see `arms:`).
    #[serde(default)]
    pub arm_theta_lab_deg: BTreeMap<String, f64>,
    /// Each detector's own clocks and pulser counts, by detector id, for detectors read by
    /// separate acquisition channels (`{ D01: { live_time_s: 3420.0 }, D02: { ... } }`). A
    /// key given for one detector must be given for every detector of the config; for
    /// those detectors it takes the place of the run's value of that key. Default: none
    /// (the run's clocks and scalers hold for every detector).
    #[serde(default)]
    pub detectors: BTreeMap<String, DetectorClocks>,
}

/// One detector's own dead-time clocks and pulser counts (a run record's `detectors:`);
/// the same keys, meanings and ranges as the run's. A key not given here is the run's.
#[derive(Debug, Clone, Default, PartialEq, Deserialize, JsonSchema)]
#[serde(default, deny_unknown_fields)]
pub struct DetectorClocks {
    /// Live time of this detector's acquisition channel in s; <= `real_time_s`.
    pub live_time_s: Option<f64>,
    /// Real (elapsed) time of this detector's channel in s; > 0.
    pub real_time_s: Option<f64>,
    /// Pulser signals sent into this detector's electronics; > 0.
    pub pulser_sent: Option<u64>,
    /// Pulser signals recorded in this detector's channel; <= `pulser_sent`.
    pub pulser_recorded: Option<u64>,
}

impl DetectorClocks {
    /// The record keys of these values, in the order of the fields.
    pub const KEYS: [&'static str; 4] = ["live_time_s", "real_time_s", "pulser_sent", "pulser_recorded"];

    /// Whether each key of [`Self::KEYS`] is given.
    pub fn given(&self) -> [bool; 4] {
        [
            self.live_time_s.is_some(),
            self.real_time_s.is_some(),
            self.pulser_sent.is_some(),
            self.pulser_recorded.is_some(),
        ]
    }

    /// These values, with `fallback`'s where these are not given.
    #[must_use]
    pub fn or(&self, fallback: &DetectorClocks) -> DetectorClocks {
        DetectorClocks {
            live_time_s: self.live_time_s.or(fallback.live_time_s),
            real_time_s: self.real_time_s.or(fallback.real_time_s),
            pulser_sent: self.pulser_sent.or(fallback.pulser_sent),
            pulser_recorded: self.pulser_recorded.or(fallback.pulser_recorded),
        }
    }

    /// Range problems of each value given alone: times > 0, pulser signals sent > 0.
    fn range_problems(&self) -> Vec<Problem> {
        let mut c = Checks::default();
        for (key, time_s) in [("live_time_s", self.live_time_s), ("real_time_s", self.real_time_s)] {
            if let Some(t) = time_s {
                c.positive(key, t);
            }
        }
        if let Some(n) = self.pulser_sent {
            c.require(n > 0, "pulser_sent", n, "a count > 0");
        }
        c.problems
    }

    /// Consistency problems of the pairs: live time <= real time (at `live_time_s`),
    /// pulser signals recorded <= sent (at `pulser_recorded`).
    fn pair_problems(&self) -> Vec<Problem> {
        let mut c = Checks::default();
        if let (Some(live), Some(real)) = (self.live_time_s, self.real_time_s) {
            c.require(live <= real, "live_time_s", live, &format!("at most real_time_s = {real}"));
        }
        if let (Some(sent), Some(recorded)) = (self.pulser_sent, self.pulser_recorded) {
            c.require(recorded <= sent, "pulser_recorded", recorded, &format!("at most pulser_sent = {sent}"));
        }
        c.problems
    }
}

/// What a run's data file holds.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum RunData {
    /// A yields table.
    Yields,
    /// List-mode events.
    Events,
    /// Spectra.
    Spectra,
}

impl RunRecord {
    /// The data file and its kind (the first given; `validate` insists on exactly one).
    pub fn data_file(&self) -> Option<(RunData, &str)> {
        [
            (RunData::Yields, &self.yields_file),
            (RunData::Events, &self.events_file),
            (RunData::Spectra, &self.spectra_file),
        ]
        .into_iter()
        .find_map(|(k, v)| v.as_deref().map(|v| (k, v)))
    }

    /// The charge as recorded, if exactly one way was given.
    pub fn charge(&self) -> Option<Charge> {
        match (self.charge_c, self.integrator_counts, self.integrator_scale_c_per_count) {
            (Some(q), None, None) => Some(Charge::Coulomb(q)),
            (None, Some(counts), Some(scale_c_per_count)) => Some(Charge::Integrator { counts, scale_c_per_count }),
            _ => None,
        }
    }

    /// Integrated charge in C.
    pub fn charge_c(&self) -> Option<f64> {
        self.charge().map(|c| match c {
            Charge::Coulomb(q) => q,
            Charge::Integrator { counts, scale_c_per_count } => counts * scale_c_per_count,
        })
    }

    /// Recorded event rate in 1/s: given, or accepted triggers over real time.
    pub fn recorded_rate_per_s(&self) -> Option<f64> {
        self.recorded_rate_per_s.or_else(|| match (self.triggers_accepted, self.real_time_s) {
            (Some(n), Some(t)) if t > 0.0 => Some(n as f64 / t),
            _ => None,
        })
    }

    /// The run's own clocks and pulser counts (its top-level keys).
    pub fn run_clocks(&self) -> DetectorClocks {
        DetectorClocks {
            live_time_s: self.live_time_s,
            real_time_s: self.real_time_s,
            pulser_sent: self.pulser_sent,
            pulser_recorded: self.pulser_recorded,
        }
    }

    /// The clocks and pulser counts that hold for `detector`: its own (`detectors:`) where
    /// given, else the run's.
    pub fn clocks_of(&self, detector: &str) -> DetectorClocks {
        let run = self.run_clocks();
        self.detectors.get(detector).map_or(run.clone(), |own| own.or(&run))
    }

    /// Every range and consistency problem of the record.
    pub fn validate(&self) -> Vec<Problem> {
        let mut c = Checks::default();
        let given: Vec<(&str, &String)> = [
            ("yields_file", &self.yields_file),
            ("events_file", &self.events_file),
            ("spectra_file", &self.spectra_file),
        ]
        .into_iter()
        .filter_map(|(k, v)| v.as_ref().map(|v| (k, v)))
        .collect();
        match given.as_slice() {
            [(key, path)] => {
                c.require(!path.trim().is_empty(), key, "an empty path", "the path of the run's data file")
            }
            [] => c.require(false, "yields_file", "missing", "one of yields_file, events_file, spectra_file"),
            more => c.require(
                false,
                more[1].0,
                format!("{} given together", more.iter().map(|m| m.0).collect::<Vec<_>>().join(" and ")),
                "exactly one of yields_file, events_file, spectra_file",
            ),
        }
        match self.charge() {
            Some(Charge::Coulomb(q)) => c.positive("charge_c", q),
            Some(Charge::Integrator { counts, scale_c_per_count }) => {
                c.positive("integrator_counts", counts);
                c.positive("integrator_scale_c_per_count", scale_c_per_count);
            }
            None => c.require(
                false,
                "charge_c",
                "missing or mixed charge keys",
                "charge_c, or integrator_counts with integrator_scale_c_per_count",
            ),
        }
        let run_clocks = self.run_clocks();
        c.problems.extend(run_clocks.range_problems());
        c.problems.extend(run_clocks.pair_problems());
        for (id, own) in &self.detectors {
            c.nested(&format!("detectors.{id}"), own_clock_problems(own, &run_clocks));
        }
        check_scaler_pair(&mut c, ("triggers_raw", self.triggers_raw), ("triggers_accepted", self.triggers_accepted));
        if let Some(r) = self.recorded_rate_per_s {
            c.positive("recorded_rate_per_s", r);
        }
        c.problems
    }
}

/// Problems of one detector's clocks: each value it gives, and each pair (live and real
/// time; pulser sent and recorded) of which it gives at least one, taken with the run's
/// value for the other. A problem of the run's own values is reported once, at its key.
fn own_clock_problems(own: &DetectorClocks, run: &DetectorClocks) -> Vec<Problem> {
    let [live, real, sent, recorded] = own.given();
    let mut problems = own.range_problems();
    problems.extend(own.or(run).pair_problems().into_iter().filter(|p| match p.key.as_str() {
        "live_time_s" => live || real,
        _ => sent || recorded,
    }));
    problems
}

/// A scaler pair (all, kept): all > 0 and kept <= all.
fn check_scaler_pair(c: &mut Checks, all: (&str, Option<u64>), kept: (&str, Option<u64>)) {
    if let Some(n) = all.1 {
        c.require(n > 0, all.0, n, "a count > 0");
        if let Some(k) = kept.1 {
            c.require(k <= n, kept.0, k, &format!("at most {} = {n}", all.0));
        }
    }
}

#[cfg(test)]
mod tests {
    use crate::setup::testing::record;

    #[test]
    fn a_detectors_own_clocks_are_checked_with_the_runs() {
        // (record fields, key of the one problem expected, or "" for none)
        let cases = [
            ("real_time_s: 100.0, detectors: { A: { live_time_s: 95.0 }, B: { live_time_s: 60.0 } }", ""),
            // A detector's live time beyond the run's real time.
            ("real_time_s: 100.0, detectors: { A: { live_time_s: 101.0 } }", "detectors.A.live_time_s"),
            // Its own real time shorter than the run's live time.
            ("live_time_s: 90.0, detectors: { A: { real_time_s: 80.0 } }", "detectors.A.live_time_s"),
            ("pulser_sent: 100, detectors: { A: { pulser_recorded: 101 } }", "detectors.A.pulser_recorded"),
            ("detectors: { A: { pulser_sent: 0 } }", "detectors.A.pulser_sent"),
            ("detectors: { A: { real_time_s: -1.0 } }", "detectors.A.real_time_s"),
            // The run's own inconsistency is reported once, at the run's key, not again for
            // a detector that gives only its pulser counts.
            (
                "live_time_s: 90.0, real_time_s: 80.0, detectors: { A: { pulser_sent: 10, pulser_recorded: 9 } }",
                "live_time_s",
            ),
        ];
        for (fields, key) in cases {
            let problems = record(fields).validate();
            let keys: Vec<&str> = problems.iter().map(|p| p.key.as_str()).collect();
            let want: Vec<&str> = if key.is_empty() { Vec::new() } else { vec![key] };
            assert_eq!(keys, want, "{fields}: {problems:?}");
        }
    }

    #[test]
    fn a_detectors_own_value_replaces_the_runs() {
        let run = record("live_time_s: 90.0, real_time_s: 100.0, detectors: { A: { live_time_s: 60.0 } }");
        assert_eq!(run.clocks_of("A").live_time_s, Some(60.0));
        assert_eq!(run.clocks_of("A").real_time_s, Some(100.0));
        assert_eq!(run.clocks_of("B").live_time_s, Some(90.0));
    }
}
