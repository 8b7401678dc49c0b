//! Stage `subtract_background`: net counts of each peak and their statistical error.
//!
//! Reads `counts_gross` and, when the yields table has them, `counts_background` and
//! `counts_background_err`; adds `counts_net` and `counts_net_err`.

use polars::prelude::DataFrame;
use schemars::JsonSchema;
use serde::Deserialize;

use crate::table::{f64_values, str_values, with_f64_columns};
use crate::{Problem, RunContext, Stage, StageError};

/// Settings of `subtract_background`. The background comes from the yields table (side
/// bands or a fit done upstream); this stage only combines.
#[derive(Debug, Clone, Default, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct SubtractBackgroundConfig {
    /// When the yields table has `counts_background` but no `counts_background_err`, take the
    /// background as Poisson counts with error sqrt(B) (true), or refuse the run (false).
    /// Default true.
    #[serde(default = "yes")]
    pub poisson_background_if_no_err: bool,
}

fn yes() -> bool {
    true
}

/// The built stage.
#[derive(Debug, Clone)]
pub struct SubtractBackground {
    poisson_background_if_no_err: bool,
}

impl SubtractBackgroundConfig {
    /// Build the stage (nothing to check).
    ///
    /// # Errors
    /// None today; the signature matches the other stages.
    pub fn build(&self) -> Result<SubtractBackground, Vec<Problem>> {
        Ok(SubtractBackground { poisson_background_if_no_err: self.poisson_background_if_no_err })
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
        vec!["counts_net", "counts_net_err"]
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
        with_f64_columns(table, vec![("counts_net", net), ("counts_net_err", err)])
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
