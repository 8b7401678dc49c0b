//! Stage `correct_dead_time`: the live fraction of a run, from its clocks, pulser or trigger
//! scalers, or a dead-time model with a resolving time. Adds `live_fraction` and
//! `live_fraction_err` (the same for every row of the run: one acquisition).
//!
//! The uncertainty of the live fraction is common to all detectors of the run, so the
//! cross-section stage puts it into the normalisation error.

use polars::prelude::DataFrame;
use schemars::JsonSchema;
use serde::Deserialize;

use crate::physics::dead_time::{self, LiveFraction};
use crate::physics::uncertainty::quadrature;
use crate::problem::Checks;
use crate::table::with_f64_columns;
use crate::{Problem, RunContext, RunRecord, Stage, StageError};

/// How the live fraction is found.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize, JsonSchema)]
#[serde(rename_all = "snake_case")]
pub enum DeadTimeMethod {
    /// live_time_s / real_time_s from the run record.
    ClockRatio,
    /// pulser_recorded / pulser_sent, binomial error.
    PulserRatio,
    /// triggers_accepted / triggers_raw, binomial error.
    TriggerRatio,
    /// Non-paralyzable model with `resolving_time_us` and the recorded rate.
    NonParalyzable,
    /// Paralyzable model with `resolving_time_us` and the recorded rate.
    Paralyzable,
}

impl DeadTimeMethod {
    fn is_model(self) -> bool {
        matches!(self, DeadTimeMethod::NonParalyzable | DeadTimeMethod::Paralyzable)
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
    /// counting error); default 0, range [0, 1).
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
}

impl CorrectDeadTimeConfig {
    /// Check the settings and build the stage.
    ///
    /// # Errors
    /// Every problem: a model without a resolving time, a resolving time given to a
    /// measured method, values out of range.
    pub fn build(&self) -> Result<CorrectDeadTime, Vec<Problem>> {
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
        })
    }
}

impl CorrectDeadTime {
    /// The run's live fraction with its uncertainty (counting or model, and method).
    ///
    /// # Errors
    /// A run-record value the method needs is missing, or the model is out of range.
    pub fn live_fraction(&self, run: &RunRecord) -> Result<LiveFraction, StageError> {
        let missing = |key: &str| StageError::MissingRunValue {
            key: key.to_string(),
            needed_by: format!("correct_dead_time with method {:?}", self.method),
        };
        let measured = match self.method {
            DeadTimeMethod::ClockRatio => {
                let live = run.live_time_s.ok_or_else(|| missing("live_time_s"))?;
                let real = run.real_time_s.ok_or_else(|| missing("real_time_s"))?;
                dead_time::clock_ratio(live, real)
            }
            DeadTimeMethod::PulserRatio => {
                let sent = run.pulser_sent.ok_or_else(|| missing("pulser_sent"))?;
                let recorded = run.pulser_recorded.ok_or_else(|| missing("pulser_recorded"))?;
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
                LiveFraction { value, err: (df_dtau * self.resolving_time_err_s).abs() }
            }
        };
        let err = quadrature(&[measured.err, measured.value * self.method_rel_err]);
        Ok(LiveFraction { value: measured.value, err })
    }
}

impl Stage for CorrectDeadTime {
    fn name(&self) -> &'static str {
        "correct_dead_time"
    }
    fn needs(&self) -> Vec<&'static str> {
        Vec::new()
    }
    fn adds(&self) -> Vec<&'static str> {
        vec!["live_fraction", "live_fraction_err"]
    }
    fn run(&self, table: DataFrame, ctx: &RunContext<'_>) -> Result<DataFrame, StageError> {
        let f = self.live_fraction(ctx.run)?;
        let n = table.height();
        with_f64_columns(table, vec![("live_fraction", vec![f.value; n]), ("live_fraction_err", vec![f.err; n])])
    }
    fn check_run(&self, run: &RunRecord) -> Vec<Problem> {
        match self.live_fraction(run) {
            Ok(_) => Vec::new(),
            Err(StageError::MissingRunValue { key, needed_by }) => {
                vec![Problem::new(key, "missing", format!("a value ({needed_by} reads it)"))]
            }
            Err(e) => {
                vec![Problem::new("recorded_rate_per_s", run.recorded_rate_per_s().unwrap_or(f64::NAN), e.to_string())]
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::setup::testing::record;
    use approx::assert_relative_eq;

    fn stage(yaml: &str) -> CorrectDeadTime {
        serde_yaml::from_str::<CorrectDeadTimeConfig>(yaml).expect("settings parse").build().expect("builds")
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
            ("{ method: pulser_ratio }", "pulser_sent: 10000, pulser_recorded: 9000", 0.9, 0.003),
            ("{ method: trigger_ratio }", "triggers_raw: 10000, triggers_accepted: 9000", 0.9, 0.003),
            (
                "{ method: non_paralyzable, resolving_time_us: 10.0, resolving_time_err_us: 1.0 }",
                "recorded_rate_per_s: 10000.0",
                0.9,
                0.01,
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
        ];
        for (settings, run, key) in cases {
            let problems = stage(settings).check_run(&record(run));
            assert!(problems.iter().any(|p| p.key.starts_with(key)), "{key}: {problems:?}");
        }
    }
}
