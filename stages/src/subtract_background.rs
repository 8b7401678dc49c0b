//! Stage `subtract_background`: net counts of each peak and their statistical error.
//!
//! Reads `counts_gross` and, when the yields table has them, `counts_background` and
//! `counts_background_err`; adds `counts_net` and `counts_net_err`.

use polars::prelude::DataFrame;
use schemars::JsonSchema;
use serde::Deserialize;

use crate::table::{f64_values, with_f64_columns};
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

/// Net counts and their standard uncertainty:
///     Y = G - B,   u(Y)² = G + u(B)²
/// G: gross counts in the peak window (Poisson, u(G)² = G), B: background under the peak
/// with its standard uncertainty u(B) (for Poisson side-band counts u(B)² = B). Holds for
/// independent G and B (JCGM 100:2008 Eq. 10; Poisson variance, common practice).
pub fn net_counts(gross: f64, background: f64, background_err: f64) -> (f64, f64) {
    (gross - background, (gross + background_err * background_err).sqrt())
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
        with_f64_columns(table, vec![("counts_net", net), ("counts_net_err", err)])
    }
}
