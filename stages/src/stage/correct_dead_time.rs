//! Stage `correct_dead_time`: the live fraction of a run, from its clocks, pulser or trigger
//! scalers, or a dead-time model with a resolving time. Adds `live_fraction` and
//! `live_fraction_err`: the same for every row of the run (one acquisition), or each
//! detector's own where the run record gives each detector its own clocks or pulser counts
//! (`detectors:`; detectors read by separate acquisition channels).
//!
//! The uncertainty of the run's one live fraction is common to all its detectors and goes
//! into the normalisation error; a detector's own goes into its statistical error (see
//! [`live_fraction_rel_err`]).

use std::collections::BTreeMap;

use polars::prelude::DataFrame;
use schemars::JsonSchema;
use serde::Deserialize;

use crate::physics::dead_time::{self, LiveFraction};
use crate::physics::uncertainty::quadrature;
use crate::problem::Checks;
use crate::setup::DetectorClocks;
use crate::table::{str_values, with_f64_columns};
use crate::{Problem, RunContext, RunRecord, Setup, Stage, StageError};

/// How the live fraction is found.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize, JsonSchema)]
#[serde(rename_all = "snake_case")]
pub enum DeadTimeMethod {
    /// live_time_s / real_time_s from the run record; binomial error sqrt(f (1 - f) /
    /// pulser_sent) where the record also gives pulser_sent and pulser_recorded, else none
    /// (set `method_rel_err`).
    ClockRatio,
    /// pulser_recorded / pulser_sent, binomial error.
    PulserRatio,
    /// triggers_accepted / triggers_raw, binomial error.
    TriggerRatio,
    /// Non-paralyzable model with `resolving_time_us` and the recorded rate; error from
    /// `resolving_time_err_us` and, where the rate is triggers_accepted / real_time_s,
    /// the counting error of the triggers, which include the peaks' own events
    /// ([`dead_time::counted_trigger_live_fraction_err`]).
    NonParalyzable,
    /// Paralyzable model with `resolving_time_us` and the recorded rate; errors as for
    /// `non_paralyzable`.
    Paralyzable,
}

impl DeadTimeMethod {
    fn is_model(self) -> bool {
        matches!(self, DeadTimeMethod::NonParalyzable | DeadTimeMethod::Paralyzable)
    }

    /// The method as written in the config.
    fn name(self) -> &'static str {
        match self {
            DeadTimeMethod::ClockRatio => "clock_ratio",
            DeadTimeMethod::PulserRatio => "pulser_ratio",
            DeadTimeMethod::TriggerRatio => "trigger_ratio",
            DeadTimeMethod::NonParalyzable => "non_paralyzable",
            DeadTimeMethod::Paralyzable => "paralyzable",
        }
    }

    /// The clocks or pulser counts (of [`DetectorClocks::KEYS`]) whose values make this
    /// method's live fraction: a detector's own values of these give it its own. Empty for
    /// the methods that take one live fraction for the whole run (triggers, models).
    fn own_value_keys(self) -> &'static [&'static str] {
        match self {
            DeadTimeMethod::ClockRatio => &["live_time_s", "real_time_s"],
            DeadTimeMethod::PulserRatio => &["pulser_sent", "pulser_recorded"],
            _ => &[],
        }
    }
}

/// Settings of `correct_dead_time`.
#[derive(Debug, Clone, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct CorrectDeadTimeConfig {
    /// `clock_ratio`, `pulser_ratio`, `trigger_ratio`, `non_paralyzable` or `paralyzable`.
    pub method: DeadTimeMethod,
    /// Resolving (dead) time per event in µs, for the two models; > 0.
    #[serde(default)]
    pub resolving_time_us: Option<f64>,
    /// Standard uncertainty of the resolving time in µs; default 0, >= 0.
    #[serde(default)]
    pub resolving_time_err_us: f64,
    /// Relative uncertainty assigned to the method itself (added in quadrature to the
    /// counting error: binomial for the pulser and trigger ratios, and for the clock ratio
    /// where the run gives pulser counts; the models' from `resolving_time_err_us`); default
    /// 0, range [0, 1). A clock ratio without a pulser has no other error: the README says
    /// what to set.
    #[serde(default)]
    pub method_rel_err: f64,
}

/// The built stage.
#[derive(Debug, Clone)]
pub struct CorrectDeadTime {
    method: DeadTimeMethod,
    resolving_time_s: f64,
    resolving_time_err_s: f64,
    method_rel_err: f64,
    /// The config's detector ids, against which a record's per-detector values are
    /// checked; empty when built without a set-up.
    detector_ids: Vec<String>,
}

impl CorrectDeadTimeConfig {
    /// Check the settings and build the stage (`setup` as in [`crate::StageConfig::build`]:
    /// it gives the detectors whose own clocks a run record may hold).
    ///
    /// # Errors
    /// Every problem: a model without a resolving time, a resolving time given to a
    /// measured method, values out of range.
    pub fn build(&self, setup: Option<&Setup>) -> Result<CorrectDeadTime, Vec<Problem>> {
        let mut c = Checks::default();
        c.non_negative("resolving_time_err_us", self.resolving_time_err_us);
        c.rel_err("method_rel_err", self.method_rel_err);
        match (self.method.is_model(), self.resolving_time_us) {
            (true, Some(t)) => c.positive("resolving_time_us", t),
            (true, None) => {
                c.require(false, "resolving_time_us", "missing", "the resolving time in µs (the models need it)")
            }
            (false, Some(t)) => c.require(
                false,
                "resolving_time_us",
                t,
                "no resolving time: only the non_paralyzable and paralyzable methods use it",
            ),
            (false, None) => {}
        }
        if !c.problems.is_empty() {
            return Err(c.problems);
        }
        Ok(CorrectDeadTime {
            method: self.method,
            resolving_time_s: self.resolving_time_us.unwrap_or(0.0) * 1e-6,
            resolving_time_err_s: self.resolving_time_err_us * 1e-6,
            method_rel_err: self.method_rel_err,
            detector_ids: setup.map(|s| s.detectors.iter().map(|d| d.id.0.clone()).collect()).unwrap_or_default(),
        })
    }
}

impl CorrectDeadTime {
    /// The run's one live fraction, from its own clocks and scalers, with its uncertainty
    /// (counting or model, and method).
    ///
    /// # Errors
    /// A run-record value the method needs is missing, or the model is out of range.
    pub fn live_fraction(&self, run: &RunRecord) -> Result<LiveFraction, StageError> {
        self.live_fraction_from(&run.run_clocks(), run)
    }

    /// The live fraction from the clocks and pulser counts `clocks` (the run's, or one
    /// detector's with the run's where it gives none) and the run's trigger scalers.
    fn live_fraction_from(&self, clocks: &DetectorClocks, run: &RunRecord) -> Result<LiveFraction, StageError> {
        let missing = |key: &str| StageError::MissingRunValue {
            key: key.to_string(),
            needed_by: format!("correct_dead_time with method {}", self.method.name()),
        };
        let measured = match self.method {
            DeadTimeMethod::ClockRatio => {
                let live = clocks.live_time_s.ok_or_else(|| missing("live_time_s"))?;
                let real = clocks.real_time_s.ok_or_else(|| missing("real_time_s"))?;
                match (clocks.pulser_sent, clocks.pulser_recorded) {
                    (Some(sent), Some(_)) => dead_time::clock_ratio_with_pulser(live, real, sent),
                    _ => dead_time::clock_ratio(live, real),
                }
            }
            DeadTimeMethod::PulserRatio => {
                let sent = clocks.pulser_sent.ok_or_else(|| missing("pulser_sent"))?;
                let recorded = clocks.pulser_recorded.ok_or_else(|| missing("pulser_recorded"))?;
                dead_time::count_ratio(recorded, sent)
            }
            DeadTimeMethod::TriggerRatio => {
                let raw = run.triggers_raw.ok_or_else(|| missing("triggers_raw"))?;
                let accepted = run.triggers_accepted.ok_or_else(|| missing("triggers_accepted"))?;
                dead_time::count_ratio(accepted, raw)
            }
            DeadTimeMethod::NonParalyzable | DeadTimeMethod::Paralyzable => {
                let rate = run
                    .recorded_rate_per_s()
                    .ok_or_else(|| missing("recorded_rate_per_s (or triggers_accepted with real_time_s)"))?;
                let model = if self.method == DeadTimeMethod::Paralyzable {
                    dead_time::paralyzable
                } else {
                    dead_time::non_paralyzable
                };
                let (value, df_dtau) = model(rate, self.resolving_time_s).map_err(|source| StageError::Physics {
                    context: format!("run {}", run.run),
                    source,
                    origin: crate::Origin::RunRecord,
                })?;
                let df_drate = dead_time::df_drate(rate, self.resolving_time_s, df_dtau);
                let counted = match (run.recorded_rate_per_s, run.triggers_accepted) {
                    (None, Some(n)) => dead_time::counted_trigger_live_fraction_err(value, df_drate, rate, n),
                    _ => 0.0,
                };
                LiveFraction { value, err: (df_dtau * self.resolving_time_err_s).hypot(counted) }
            }
        };
        let err = quadrature(&[measured.err, measured.value * self.method_rel_err]);
        Ok(LiveFraction { value: measured.value, err })
    }

    /// Problems of a run record's per-detector clocks (`detectors:`) for this method, with
    /// `ids` the config's detectors (or, without a set-up, those the record names): an id
    /// that is not a detector of the config; a key given for some detectors and not for
    /// others; per-detector values with a method that does not read them.
    fn own_clock_problems(&self, run: &RunRecord, ids: &[&str]) -> Vec<Problem> {
        let mut problems = Vec::new();
        let listed: Vec<&str> = run.detectors.keys().map(String::as_str).collect();
        let ids = if ids.is_empty() { &listed[..] } else { ids };
        for id in listed.iter().filter(|id| !ids.contains(id)) {
            problems.push(Problem::new(
                format!("detectors.{id}"),
                id,
                format!("a detector of the config ({})", ids.join(", ")),
            ));
        }
        let mut given_keys = Vec::new();
        for (i, key) in DetectorClocks::KEYS.into_iter().enumerate() {
            let (have, lack): (Vec<&str>, Vec<&str>) =
                ids.iter().partition(|id| run.detectors.get(**id).is_some_and(|c| c.given()[i]));
            if have.is_empty() {
                continue;
            }
            given_keys.push(key);
            if !lack.is_empty() {
                problems.push(Problem::new(
                    "detectors",
                    format!("{key} given for {} and missing for {}", have.join(", "), lack.join(", ")),
                    format!("{key} for every detector of the config or for none (the run's {key} then holds for all)"),
                ));
            }
        }
        let reads = self.method.own_value_keys();
        if !given_keys.is_empty() && !given_keys.iter().any(|k| reads.contains(k)) {
            problems.push(Problem::new(
                "detectors",
                format!("each detector's own {} with method {}", given_keys.join(", "), self.method.name()),
                format!(
                    "no per-detector values, or a method that reads them: clock_ratio (own live_time_s or \
                     real_time_s) or pulser_ratio (own pulser_sent or pulser_recorded); {} takes one live \
                     fraction for the whole run",
                    self.method.name()
                ),
            ));
        }
        problems
    }

    /// Each row's live fraction: the run's one, or, where the record gives each detector
    /// its own clocks or pulser counts, the row's detector's (`ids`: the config's detectors).
    ///
    /// # Errors
    /// A run-record value the method needs is missing, or the per-detector values are
    /// incomplete (see [`Self::own_clock_problems`]).
    fn live_fractions(
        &self,
        table: &DataFrame,
        run: &RunRecord,
        ids: &[&str],
    ) -> Result<Vec<LiveFraction>, StageError> {
        if !has_own_clocks(run) {
            return Ok(vec![self.live_fraction(run)?; table.height()]);
        }
        if let Some(p) = self.own_clock_problems(run, ids).into_iter().next() {
            return Err(StageError::RunRecordValue(p));
        }
        let mut by_detector: BTreeMap<String, LiveFraction> = BTreeMap::new();
        str_values(table, "detector")?
            .into_iter()
            .map(|d| match by_detector.get(&d) {
                Some(f) => Ok(*f),
                None => {
                    let f = self.live_fraction_from(&run.clocks_of(&d), run)?;
                    by_detector.insert(d, f);
                    Ok(f)
                }
            })
            .collect()
    }
}

/// Whether the record gives any detector its own clocks or pulser counts.
fn has_own_clocks(run: &RunRecord) -> bool {
    run.detectors.values().any(|c| c.given().contains(&true))
}

/// The relative uncertainty of a reduced table's live fractions, split by what it is shared
/// with (see [`live_fraction_rel_err`]).
#[derive(Debug, Clone, PartialEq)]
pub struct LiveFractionRelErr {
    /// Common to every detector of the run (one acquisition): part of the normalisation.
    pub common: f64,
    /// Each row's own (per-detector dead time), independent of the other detectors and
    /// runs: part of the row's statistical error.
    pub own: Vec<f64>,
}

/// How the live-fraction columns of one run are to be read. One acquisition gives every row
/// the same live fraction and error; that error is common to all detectors of the run, fully
/// correlated between them, and belongs to the normalisation (`common`; `own` all 0).
/// Per-detector dead time gives the rows their detectors' own values; each error is then
/// independent of the other detectors and of the other runs and joins the row's statistical
/// error (`own`; `common` 0). Detectors whose own clocks happen to give identical values
/// are read as one acquisition, which changes nothing within a run and only the
/// correlations of a combination. `live` and `err` are the columns `live_fraction` and
/// `live_fraction_err`, row by row.
pub fn live_fraction_rel_err(live: &[f64], err: &[f64]) -> LiveFractionRelErr {
    let same = |v: &[f64]| v.windows(2).all(|w| w[0].to_bits() == w[1].to_bits());
    let rel: Vec<f64> = live.iter().zip(err).map(|(f, u)| u / f).collect();
    if same(live) && same(err) {
        LiveFractionRelErr { common: rel.first().copied().unwrap_or(0.0), own: vec![0.0; rel.len()] }
    } else {
        LiveFractionRelErr { common: 0.0, own: rel }
    }
}

impl Stage for CorrectDeadTime {
    fn name(&self) -> &'static str {
        "correct_dead_time"
    }
    fn needs(&self) -> Vec<&'static str> {
        vec!["detector"]
    }
    fn adds(&self) -> Vec<&'static str> {
        vec!["live_fraction", "live_fraction_err"]
    }
    fn run(&self, table: DataFrame, ctx: &RunContext<'_>) -> Result<DataFrame, StageError> {
        let ids: Vec<&str> = ctx.setup.detectors.iter().map(|d| d.id.0.as_str()).collect();
        let f = self.live_fractions(&table, ctx.run, &ids)?;
        with_f64_columns(
            table,
            vec![
                ("live_fraction", f.iter().map(|f| f.value).collect()),
                ("live_fraction_err", f.iter().map(|f| f.err).collect()),
            ],
        )
    }
    fn check_run(&self, run: &RunRecord) -> Vec<Problem> {
        let ids: Vec<&str> = self.detector_ids.iter().map(String::as_str).collect();
        let mut problems = self.own_clock_problems(run, &ids);
        // The run's one live fraction, or each detector's own: each needs its values.
        let clocks: Vec<DetectorClocks> = if has_own_clocks(run) {
            let ids = if ids.is_empty() { run.detectors.keys().map(String::as_str).collect() } else { ids };
            ids.iter().map(|id| run.clocks_of(id)).collect()
        } else {
            vec![run.run_clocks()]
        };
        for c in &clocks {
            match self.live_fraction_from(c, run) {
                Ok(_) => {}
                Err(StageError::MissingRunValue { key, needed_by }) => {
                    problems.push(Problem::new(key, "missing", format!("a value ({needed_by} reads it)")));
                }
                Err(e) => problems.push(Problem::new(
                    "recorded_rate_per_s",
                    run.recorded_rate_per_s().unwrap_or(f64::NAN),
                    e.to_string(),
                )),
            }
        }
        problems.dedup();
        problems
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::setup::testing::{record, setup};
    use crate::table::f64_values;
    use approx::assert_relative_eq;
    use polars::prelude::Column;

    fn stage(yaml: &str) -> CorrectDeadTime {
        serde_yaml::from_str::<CorrectDeadTimeConfig>(yaml).expect("settings parse").build(None).expect("builds")
    }

    /// Two detectors, A and B, and the stage built for them.
    fn two_detectors(yaml: &str) -> (Setup, CorrectDeadTime) {
        let setup = setup(
            "[{ id: A, theta_lab_deg: 30.0, aperture: { shape: given, solid_angle_msr: 1.0 } },
              { id: B, theta_lab_deg: 60.0, aperture: { shape: given, solid_angle_msr: 1.0 } }]",
        );
        let config: CorrectDeadTimeConfig = serde_yaml::from_str(yaml).expect("settings parse");
        let stage = config.build(Some(&setup)).expect("builds");
        (setup, stage)
    }

    /// The stage run on rows of detectors A, B, A: (live fraction, error) per row.
    fn run_rows(setup: &Setup, stage: &CorrectDeadTime, run: &str) -> Result<Vec<(f64, f64)>, StageError> {
        let table = DataFrame::new_infer_height(vec![Column::new("detector".into(), ["A", "B", "A"])]).expect("table");
        let out = stage.run(table, &RunContext { setup, run: &record(run) })?;
        let (f, u) = (f64_values(&out, "live_fraction")?, f64_values(&out, "live_fraction_err")?);
        Ok(f.into_iter().zip(u).collect())
    }

    #[test]
    fn each_detector_gets_its_own_live_fraction_where_the_record_gives_its_clocks() {
        // (settings, run record, (f, u) of A, (f, u) of B); worked by hand:
        // pulser 9000/10000 and 6000/10000: u = √(0.9 · 0.1 / 10⁴) = 0.003 and
        // √(0.6 · 0.4 / 10⁴) = √2.4e-5 (binomial, common practice).
        let cases = [
            // The run's one live fraction for both, as without `detectors:`.
            ("{ method: clock_ratio }", "live_time_s: 90.0, real_time_s: 100.0", (0.9, 0.0), (0.9, 0.0)),
            // Own live clocks, the run's real time.
            (
                "{ method: clock_ratio }",
                "live_time_s: 90.0, real_time_s: 100.0,
                 detectors: { A: { live_time_s: 95.0 }, B: { live_time_s: 60.0 } }",
                (0.95, 0.0),
                (0.6, 0.0),
            ),
            // Own live and real clocks; a 1 % method error of each.
            (
                "{ method: clock_ratio, method_rel_err: 0.01 }",
                "detectors: { A: { live_time_s: 45.0, real_time_s: 50.0 }, B: { live_time_s: 30.0, real_time_s: 50.0 } }",
                (0.9, 0.009),
                (0.6, 0.006),
            ),
            // Own recorded pulser counts, the run's pulser sent to both.
            (
                "{ method: pulser_ratio }",
                "pulser_sent: 10000, detectors: { A: { pulser_recorded: 9000 }, B: { pulser_recorded: 6000 } }",
                (0.9, 0.003),
                (0.6, 2.4e-5f64.sqrt()),
            ),
            // Own live clocks and the run's pulser of N = 10⁴ signals: each detector's
            // binomial error of its own clock ratio, √(f (1 − f) / N).
            (
                "{ method: clock_ratio }",
                "real_time_s: 100.0, pulser_sent: 10000, pulser_recorded: 9000,
                 detectors: { A: { live_time_s: 95.0 }, B: { live_time_s: 60.0 } }",
                (0.95, 4.75e-6f64.sqrt()),
                (0.6, 2.4e-5f64.sqrt()),
            ),
        ];
        for (settings, run, a, b) in cases {
            let (setup, stage) = two_detectors(settings);
            assert!(stage.check_run(&record(run)).is_empty(), "{run}: {:?}", stage.check_run(&record(run)));
            let rows = run_rows(&setup, &stage, run).expect("live fractions");
            for ((f, u), (want_f, want_u)) in rows.into_iter().zip([a, b, a]) {
                // 1e-12: one division and one square root.
                assert_relative_eq!(f, want_f, max_relative = 1e-12);
                assert_relative_eq!(u, want_u, max_relative = 1e-12, epsilon = 1e-15);
            }
        }
    }

    #[test]
    fn incomplete_or_unread_per_detector_clocks_are_refused_naming_the_detectors() {
        // (settings, run record, key, text the found value holds, text the expected holds)
        let cases = [
            (
                "{ method: clock_ratio }",
                "real_time_s: 100.0, detectors: { A: { live_time_s: 95.0 } }",
                "detectors",
                "live_time_s given for A and missing for B",
                "live_time_s for every detector of the config or for none",
            ),
            (
                "{ method: pulser_ratio }",
                "pulser_sent: 100, pulser_recorded: 90, detectors: { B: { pulser_recorded: 60 } }",
                "detectors",
                "pulser_recorded given for B and missing for A",
                "the run's pulser_recorded then holds for all",
            ),
            (
                "{ method: clock_ratio }",
                "real_time_s: 100.0, detectors: { A: { live_time_s: 95.0 }, B: { live_time_s: 60.0 }, C: { live_time_s: 1.0 } }",
                "detectors.C",
                "C",
                "a detector of the config (A, B)",
            ),
            (
                "{ method: trigger_ratio }",
                "triggers_raw: 100, triggers_accepted: 90,
                 detectors: { A: { pulser_sent: 10, pulser_recorded: 9 }, B: { pulser_sent: 10, pulser_recorded: 6 } }",
                "detectors",
                "each detector's own pulser_sent, pulser_recorded with method trigger_ratio",
                "trigger_ratio takes one live fraction for the whole run",
            ),
        ];
        for (settings, run, key, found, expected) in cases {
            let (setup, stage) = two_detectors(settings);
            let problems = stage.check_run(&record(run));
            let p = problems.iter().find(|p| p.key == key).unwrap_or_else(|| panic!("{key}: {problems:?}"));
            assert!(p.found.contains(found) && p.expected.contains(expected), "{p:?}");
            // Reducing refuses the same record with the same words.
            let e = run_rows(&setup, &stage, run).expect_err("refused");
            assert!(matches!(e, StageError::RunRecordValue(_)) && e.to_string().contains(found), "{e}");
        }
    }

    #[test]
    fn live_fraction_by_each_method() {
        // (settings, run record, live fraction, its error); worked by hand:
        // pulser 9000/10000: f = 0.9, u = √(0.9 · 0.1 / 10⁴) = 0.003;
        // non-paralyzable, m = 1e4 /s, τ = 10 µs: f = 1 − m τ = 0.9, u = m u(τ) = 1e4 · 1e-6;
        // clock ratio with a 1 % method error: u = 0.8 · 0.01.
        let cases = [
            ("{ method: clock_ratio }", "live_time_s: 90.0, real_time_s: 100.0", 0.9, 0.0),
            ("{ method: clock_ratio, method_rel_err: 0.01 }", "live_time_s: 80.0, real_time_s: 100.0", 0.8, 0.008),
            // Clock ratio with a pulser of N = 10⁴: binomial u = √(f (1 − f) / N) = 0.003;
            // with a 1 % method error too: √(0.003² + 0.009²) = √9e-5.
            (
                "{ method: clock_ratio }",
                "live_time_s: 90.0, real_time_s: 100.0, pulser_sent: 10000, pulser_recorded: 9000",
                0.9,
                0.003,
            ),
            (
                "{ method: clock_ratio, method_rel_err: 0.01 }",
                "live_time_s: 90.0, real_time_s: 100.0, pulser_sent: 10000, pulser_recorded: 9000",
                0.9,
                9e-5f64.sqrt(),
            ),
            // Pulser signals sent but none said recorded: no pulser check, no binomial error.
            ("{ method: clock_ratio }", "live_time_s: 90.0, real_time_s: 100.0, pulser_sent: 10000", 0.9, 0.0),
            ("{ method: pulser_ratio }", "pulser_sent: 10000, pulser_recorded: 9000", 0.9, 0.003),
            ("{ method: trigger_ratio }", "triggers_raw: 10000, triggers_accepted: 9000", 0.9, 0.003),
            (
                "{ method: non_paralyzable, resolving_time_us: 10.0, resolving_time_err_us: 1.0 }",
                "recorded_rate_per_s: 10000.0",
                0.9,
                0.01,
            ),
            // The rate counted: m = 90000 / 10 s = 9000 /s, f = 1 − m τ = 0.91, k = m τ/f =
            // 0.098901, u(f) = f √(k² + 2k)/√90000 = 1.3820274961085252e-3 (Python).
            (
                "{ method: non_paralyzable, resolving_time_us: 10.0 }",
                "triggers_accepted: 90000, real_time_s: 10.0",
                0.91,
                1.382_027_496_108_525_2e-3,
            ),
        ];
        for (settings, run, value, err) in cases {
            let f = stage(settings).live_fraction(&record(run)).expect("a live fraction");
            // 1e-12: a ratio, a product and a square root, a few roundings; epsilon 1e-15 for
            // the exact clock ratio, whose error is 0.
            assert_relative_eq!(f.value, value, max_relative = 1e-12);
            assert_relative_eq!(f.err, err, max_relative = 1e-12, epsilon = 1e-15);
        }
    }

    #[test]
    fn a_missing_scaler_names_the_key_the_method_reads() {
        // (settings, run record, key named)
        let cases = [
            ("{ method: clock_ratio }", "live_time_s: 90.0", "real_time_s"),
            ("{ method: pulser_ratio }", "pulser_sent: 100", "pulser_recorded"),
            ("{ method: paralyzable, resolving_time_us: 5.0 }", "live_time_s: 1.0", "recorded_rate_per_s"),
            // Each detector's own live clock, and no real time for them or the run.
            (
                "{ method: clock_ratio }",
                "detectors: { A: { live_time_s: 9.0 }, B: { live_time_s: 8.0 } }",
                "real_time_s",
            ),
        ];
        for (settings, run, key) in cases {
            let problems = stage(settings).check_run(&record(run));
            assert!(problems.iter().any(|p| p.key.starts_with(key)), "{key}: {problems:?}");
        }
    }

    #[test]
    fn a_shared_live_fraction_is_common_and_a_detectors_own_is_its_own() {
        // (live fractions, their errors, common relative error, each row's own)
        type Case = (&'static [f64], &'static [f64], f64, &'static [f64]);
        let cases: [Case; 4] = [
            // One acquisition: 0.9 ± 0.009 in every row, 1 % for the whole run.
            (&[0.9, 0.9, 0.9], &[0.009, 0.009, 0.009], 0.01, &[0.0, 0.0, 0.0]),
            // Per-detector dead time: 0.95 ± 0.0019 (0.2 %) and 0.6 ± 0.006 (1 %).
            (&[0.95, 0.6], &[0.0019, 0.006], 0.0, &[0.002, 0.01]),
            // The same fraction with different errors is still per detector.
            (&[0.9, 0.9], &[0.009, 0.0], 0.0, &[0.01, 0.0]),
            (&[], &[], 0.0, &[]),
        ];
        for (live, err, common, own) in cases {
            let got = live_fraction_rel_err(live, err);
            // 1e-12: one division.
            assert_relative_eq!(got.common, common, max_relative = 1e-12);
            assert_eq!(got.own.len(), own.len());
            for (g, w) in got.own.iter().zip(own) {
                assert_relative_eq!(*g, *w, max_relative = 1e-12);
            }
        }
    }
}
