//! Stage `subtract_background`: net counts of each peak and their statistical error.
//!
//! Reads `counts_gross` and, when the yields table has them, `counts_background` and
//! `counts_background_err`; adds `counts_net` and `counts_net_err`, and for peaks whose net
//! counts are consistent with zero a Feldman–Cousins interval on the signal counts
//! (`counts_net_lower`, `counts_net_upper`, empty elsewhere) with the flag `upper_limit`.
//! `compute_lab_cross_section` and `transform_to_cm` carry the interval on to the cross
//! sections.

use polars::prelude::{Column, DataFrame};
use schemars::JsonSchema;
use serde::Deserialize;

use crate::physics::small_signal::{feldman_cousins_interval, SignalInterval, ONE_SIGMA_CONFIDENCE_LEVEL};
use crate::table::{f64_values, str_values, with_f64_columns};

use crate::physics::PhysicsError;
use crate::{Origin, Problem, RunContext, Stage, StageError};

/// Settings of `subtract_background`. The background comes from the yields table (side
/// bands or a fit done upstream); this stage only combines.
#[derive(Debug, Clone, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct SubtractBackgroundConfig {
    /// When the yields table has `counts_background` but no `counts_background_err`, take the
    /// background as Poisson counts with error sqrt(B) (true), or refuse the run (false).
    /// Default true.
    #[serde(default = "yes")]
    pub poisson_background_if_no_err: bool,
    /// A peak whose net counts are below this many of their standard errors is consistent
    /// with zero: it gets a Feldman–Cousins interval on its signal counts and
    /// `upper_limit: true`. Pure number, default 2.0, accepted > 0.
    #[serde(default = "two")]
    pub interval_below_sigmas: f64,
    /// Confidence level of that interval. Pure number, default 0.6827 (one standard
    /// deviation), accepted in (0, 1), e.g. 0.9 or 0.95.
    #[serde(default = "one_sigma_level")]
    pub confidence_level: f64,
}

impl Default for SubtractBackgroundConfig {
    fn default() -> Self {
        SubtractBackgroundConfig {
            poisson_background_if_no_err: yes(),
            interval_below_sigmas: two(),
            confidence_level: one_sigma_level(),
        }
    }
}

fn yes() -> bool {
    true
}

fn two() -> f64 {
    2.0
}

fn one_sigma_level() -> f64 {
    ONE_SIGMA_CONFIDENCE_LEVEL
}

/// The built stage.
#[derive(Debug, Clone)]
pub struct SubtractBackground {
    poisson_background_if_no_err: bool,
    interval_below_sigmas: f64,
    confidence_level: f64,
}

impl SubtractBackgroundConfig {
    /// Build the stage.
    ///
    /// # Errors
    /// A problem for `interval_below_sigmas` not > 0 or `confidence_level` outside (0, 1).
    pub fn build(&self) -> Result<SubtractBackground, Vec<Problem>> {
        let mut problems = Vec::new();
        if !(self.interval_below_sigmas > 0.0 && self.interval_below_sigmas.is_finite()) {
            problems.push(Problem::new(
                "interval_below_sigmas",
                self.interval_below_sigmas,
                "a finite number > 0 of standard errors, e.g. 2.0",
            ));
        }
        if !(self.confidence_level > 0.0 && self.confidence_level < 1.0) {
            problems.push(Problem::new(
                "confidence_level",
                self.confidence_level,
                "a number in (0, 1), e.g. 0.6827, 0.9 or 0.95",
            ));
        }
        if !problems.is_empty() {
            return Err(problems);
        }
        Ok(SubtractBackground {
            poisson_background_if_no_err: self.poisson_background_if_no_err,
            interval_below_sigmas: self.interval_below_sigmas,
            confidence_level: self.confidence_level,
        })
    }
}

/// Standard uncertainty of zero observed counts: the one-sided 84.13 % (1σ) upper limit of
/// a Poisson mean when none is seen, λ_u = −ln(1 − 0.8413) = 1.841 (N. Gehrels, Astrophys.
/// J. 303 (1986) 336, Table 1, n = 0, S = 1). Zero counts do not mean a zero rate known
/// exactly: √0 = 0 would give such a point infinite weight in every mean and χ².
pub const ZERO_COUNTS_ERR: f64 = 1.841;

/// Net counts and their standard uncertainty:
///     Y = G − B,   u(Y)² = u(G)² + u(B)²,   u(G)² = G (Poisson) for G > 0,
///     u(0) = 1.841 ([`ZERO_COUNTS_ERR`], the Poisson 1σ upper limit for none seen)
/// G: gross counts in the peak window, B: background under the peak with its standard
/// uncertainty u(B) (for Poisson side-band counts u(B)² = B). Holds for independent G and
/// B (JCGM 100:2008 Eq. 10; Poisson variance, common practice; n = 0: Gehrels 1986).
pub fn net_counts(gross: f64, background: f64, background_err: f64) -> (f64, f64) {
    let gross_var = if gross > 0.0 { gross } else { ZERO_COUNTS_ERR * ZERO_COUNTS_ERR };
    (gross - background, (gross_var + background_err * background_err).sqrt())
}

/// Net counts below −3 standard errors: more background than gross counts, beyond what a
/// fluctuation of a true zero gives (a 0.13 % one-sided chance, common practice), which
/// points at a wrong background, not at statistics.
pub const EXCESS_BACKGROUND_SIGMAS: f64 = 3.0;

/// Whether the net counts are impossibly negative (see [`EXCESS_BACKGROUND_SIGMAS`]).
pub fn excess_background(net: f64, net_err: f64) -> bool {
    net < -EXCESS_BACKGROUND_SIGMAS * net_err
}

/// Whether net counts Y with standard error u(Y) are consistent with zero: Y < k·u(Y) for
/// k = `interval_below_sigmas` (a significance below k standard deviations; common practice).
pub fn consistent_with_zero(net: f64, net_err: f64, below_sigmas: f64) -> bool {
    net < below_sigmas * net_err
}

/// The Feldman–Cousins interval on the signal counts of a peak with G gross counts on a
/// background B (see [`feldman_cousins_interval`]): n₀ = G rounded to a whole count, the
/// background max(B, 0) taken as known.
///
/// # Errors
/// [`PhysicsError::OutsideDomain`] for a confidence level outside (0, 1) (the stage's
/// `build` refuses it first) or a background that is not finite.
pub fn signal_interval(gross: f64, background: f64, confidence_level: f64) -> Result<SignalInterval, PhysicsError> {
    let observed = gross.max(0.0).round() as u64;
    feldman_cousins_interval(observed, background.max(0.0), confidence_level)
}

/// Warn, naming detector, state and counts, of every row whose background exceeds its gross
/// counts beyond statistics; the row is kept (its cross section is negative).
fn warn_of_excess_background(
    table: &DataFrame,
    gross: &[f64],
    background: &[f64],
    net: &[f64],
    err: &[f64],
) -> Result<(), StageError> {
    let bad: Vec<usize> = (0..net.len()).filter(|&i| excess_background(net[i], err[i])).collect();
    if bad.is_empty() {
        return Ok(());
    }
    let (detectors, states) = (str_values(table, "detector")?, str_values(table, "state")?);
    for i in bad {
        tracing::warn!(
            detector = %detectors[i],
            state = %states[i],
            "background {} is more than the gross counts {}: net {:.1} ± {:.1}, below −3 standard errors; check the background",
            background[i],
            gross[i],
            net[i],
            err[i]
        );
    }
    Ok(())
}

impl Stage for SubtractBackground {
    fn name(&self) -> &'static str {
        "subtract_background"
    }
    fn needs(&self) -> Vec<&'static str> {
        vec!["counts_gross"]
    }
    fn adds(&self) -> Vec<&'static str> {
        vec!["counts_net", "counts_net_err", "counts_net_lower", "counts_net_upper", "upper_limit"]
    }
    fn run(&self, table: DataFrame, _ctx: &RunContext<'_>) -> Result<DataFrame, StageError> {
        let gross = f64_values(&table, "counts_gross")?;
        let has = |name: &str| table.column(name).is_ok();
        let background =
            if has("counts_background") { f64_values(&table, "counts_background")? } else { vec![0.0; gross.len()] };
        let background_err = if has("counts_background_err") {
            f64_values(&table, "counts_background_err")?
        } else if !has("counts_background") || self.poisson_background_if_no_err {
            background.iter().map(|b| b.max(0.0).sqrt()).collect()
        } else {
            return Err(StageError::MissingColumn {
                column: "counts_background_err".into(),
                found: crate::table::column_list(&table),
            });
        };
        let (net, err): (Vec<f64>, Vec<f64>) =
            gross.iter().zip(&background).zip(&background_err).map(|((g, b), u)| net_counts(*g, *b, *u)).unzip();
        warn_of_excess_background(&table, &gross, &background, &net, &err)?;
        let limited: Vec<bool> =
            net.iter().zip(&err).map(|(y, u)| consistent_with_zero(*y, *u, self.interval_below_sigmas)).collect();
        let mut lower = Vec::with_capacity(net.len());
        let mut upper = Vec::with_capacity(net.len());
        for (i, &limit) in limited.iter().enumerate() {
            let interval = if limit {
                let interval = signal_interval(gross[i], background[i], self.confidence_level).map_err(|source| {
                    StageError::Physics { context: format!("data row {}", i + 1), source, origin: Origin::Table }
                })?;
                Some(interval)
            } else {
                None
            };
            lower.push(interval.map(|v| v.lower));
            upper.push(interval.map(|v| v.upper));
        }
        let mut table = with_f64_columns(table, vec![("counts_net", net), ("counts_net_err", err)])?;
        table.with_column(Column::new("counts_net_lower".into(), lower))?;
        table.with_column(Column::new("counts_net_upper".into(), upper))?;
        table.with_column(Column::new("upper_limit".into(), limited))?;
        Ok(table)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn net_counts_and_their_errors() {
        // (gross, background, background_err, net, net_err); worked by hand.
        let cases = [
            (100.0, 0.0, 0.0, 100.0, 10.0),
            (100.0, 36.0, 6.0, 64.0, 136f64.sqrt()),
            (1.0, 0.0, 0.0, 1.0, 1.0),
            // Issue 11, defect 4: zero counts were 0 ± 0.
            (0.0, 0.0, 0.0, 0.0, ZERO_COUNTS_ERR),
            (0.0, 4.0, 2.0, -4.0, (ZERO_COUNTS_ERR * ZERO_COUNTS_ERR + 4.0).sqrt()),
        ];
        for (g, b, ub, net, err) in cases {
            let (y, u) = net_counts(g, b, ub);
            // 1e-15: one difference and one square root of a sum, rounded once each.
            assert_relative_eq!(y, net, max_relative = 1e-15);
            assert_relative_eq!(u, err, max_relative = 1e-15);
        }
    }

    #[test]
    fn excess_background_beyond_three_standard_errors() {
        // (gross, background, background_err, warned): −3σ is the line.
        let cases = [
            (100.0, 100.0, 10.0, false),
            (100.0, 130.0, 10.0, false), // net −30 ± 14.1: −2.1σ
            (100.0, 150.0, 10.0, true),  // net −50 ± 14.1: −3.5σ
            (0.0, 8.0, 2.0, false),      // −8 ± √(1.841² + 2²) = −8 ± 2.72: −2.94σ
            (0.0, 10.0, 2.0, true),      // −10 ± 2.72: −3.7σ
        ];
        for (g, b, ub, warned) in cases {
            let (net, err) = net_counts(g, b, ub);
            assert_eq!(excess_background(net, err), warned, "{g} {b} {ub}: {net} ± {err}");
        }
    }

    #[test]
    fn peaks_consistent_with_zero_get_an_interval() {
        // (gross, background, flagged, lower, upper) at 68.27 % and k = 2. The intervals are
        // Feldman and Cousins, Phys. Rev. D 57 (1998) 3873, Table II, b = 0 (typed from
        // memory, as in physics::small_signal) and the plain construction at b = 3 (our
        // Python scan, see small_signal's tests).
        let cases = [
            (0.0, 0.0, true, 0.0, 1.29),           // 0 ± 1.84: below 2σ
            (3.0, 0.0, true, 1.10, 5.30),          // 3 ± 1.73: 1.7σ
            (1.0, 3.0, true, 0.0, 0.44),           // −2 ± 2.0
            (5.0, 0.0, false, f64::NAN, f64::NAN), // 5 ± 2.24: 2.2σ
        ];
        for (g, b, flagged, lower, upper) in cases {
            let (net, err) = net_counts(g, b, b.sqrt());
            assert_eq!(consistent_with_zero(net, err, 2.0), flagged, "{g} {b}");
            if flagged {
                let iv = signal_interval(g, b, ONE_SIGMA_CONFIDENCE_LEVEL).expect("valid");
                // 0.006 and 0.011: the table's two decimals and the scan's step (see there).
                assert!((iv.lower - lower).abs() < 0.011 && (iv.upper - upper).abs() < 0.011, "{g} {b}: {iv:?}");
            }
        }
    }

    #[test]
    fn bad_settings_are_refused_with_their_keys() {
        let cases = [
            (0.0, 0.68, vec!["interval_below_sigmas"]),
            (2.0, 1.0, vec!["confidence_level"]),
            (-1.0, 0.0, vec!["interval_below_sigmas", "confidence_level"]),
        ];
        for (k, cl, keys) in cases {
            let config =
                SubtractBackgroundConfig { interval_below_sigmas: k, confidence_level: cl, ..Default::default() };
            let problems = config.build().expect_err("refused");
            let got: Vec<&str> = problems.iter().map(|p| p.key.as_str()).collect();
            assert_eq!(got, keys);
        }
    }

    #[test]
    fn zero_counts_error_is_the_poisson_one_sigma_upper_limit() {
        // P(0 | λ_u) = e^{−λ_u} = 1 − Φ(1) with Φ the standard normal distribution (statrs):
        // Gehrels (1986) Eq. (1) with n = 0; his Table 1 gives 1.841 to four figures.
        use statrs::distribution::{ContinuousCDF, Normal};
        let phi1 = Normal::standard().cdf(1.0);
        // 3e-4 (tightened from 1e-3): the constant has Gehrels' four figures, half a unit in
        // the last is 2.7e-4 of it (measured 1.2e-5).
        assert_relative_eq!(ZERO_COUNTS_ERR, -(1.0 - phi1).ln(), max_relative = 3e-4);
    }
}
