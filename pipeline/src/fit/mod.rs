//! Fits of reduced angular distributions: `xsflow fit DATA MODEL` and the `fits:` section
//! of a config, run once every run is reduced. `input` reads the fit file and the data,
//! `entries` plans a config's `fits:` entries and runs them after the runs, this file fits
//! one state and writes the outputs, `record` says how they were made, `render` shows the
//! report. The plan and the run modules call into this one; it uses neither.

mod entries;
mod input;
mod record;
mod render;

use std::path::{Path, PathBuf};

use polars::prelude::{Column, DataFrame, PolarsError};
use stages::fit::{FitData, FitFailure, FitReport};
use stages::physics::model_fit::NORMALISATION;
use stages::StageError;

pub use entries::{plan_fit, run_fits, Experiment, FitCounts, FitProblem, PlannedFit};
pub use input::{choose_state, load, read_data, stack, LoadedFit};
pub use record::{provenance_json, FitProvenance};
pub use render::{render, render_text};

use crate::error::Diagnostic;
use crate::layout::{FIT_JSON, PROVENANCE_JSON, PROVENANCE_KEY};
use crate::tables::{csv_bytes, parquet_bytes, write_all_atomic};

/// Why a fit could not be made. A fit that runs and does not converge is no error: its
/// report says so.
#[derive(Debug, thiserror::Error)]
pub enum FitError {
    /// The data do not suit the fit: a column missing, a value it cannot use.
    #[error(transparent)]
    Data(#[from] StageError),
    /// The fit could not start.
    #[error(transparent)]
    Start(#[from] FitFailure),
    /// The model fails at the fitted parameters while its curve is drawn.
    #[error("{0}")]
    Curve(Box<dyn std::error::Error + Send + Sync>),
    /// Reduced tables whose columns do not match.
    #[error("the reduced tables do not stack: {0}")]
    Stack(#[source] PolarsError),
    /// Nothing to stack.
    #[error("no tables")]
    NoTables,
    /// No state chosen, and the table holds several (or none).
    #[error("the table holds states {}; choose one with --state", .states.join(", "))]
    SeveralStates {
        /// The states in the table.
        states: Vec<String>,
    },
    /// The state asked for with --state is not in the table.
    #[error("--state {state}: found no rows of this state, expected one of the table's states ({})", .states.join(", "))]
    StateAbsent {
        /// The state asked for.
        state: String,
        /// The states in the table.
        states: Vec<String>,
    },
    /// The table library failed.
    #[error(transparent)]
    Table(#[from] PolarsError),
}

/// A fit's result and its best curve.
pub struct FitOutput {
    /// The report.
    pub report: FitReport,
    /// The best curve.
    pub curve: DataFrame,
}

/// Fit `state` of `table`.
///
/// # Errors
/// Data that do not suit the fit, or a fit that cannot start; the message says why.
pub fn run(loaded: &LoadedFit, table: &DataFrame, state: &str) -> Result<FitOutput, FitError> {
    let data = FitData::from_table(table, state)?;
    let (report, values) = loaded.fit.run(&data, state, loaded.model)?;
    let nu = report.parameters.iter().find(|p| p.name == NORMALISATION).map_or(1.0, |p| p.value);
    // Half-degree steps from 2° before the first point to 2° after the last, inside the
    // range where the model is defined (a curve model: its table).
    let (first, last) = (data.theta_cm_deg[0], data.theta_cm_deg[data.theta_cm_deg.len() - 1]);
    let (min, max) = loaded.fit.angle_range_deg();
    let (lo, hi) = ((first - 2.0).max(min), (last + 2.0).min(max));
    let angles: Vec<f64> = (0..).map(|i| lo + 0.5 * f64::from(i)).take_while(|a| *a <= hi).collect();
    let rows =
        loaded.fit.curve(&values, nu, &angles, data.rutherford_convention).map_err(|e| FitError::Curve(e.into()))?;
    let has_ratio = rows.iter().any(|r| r.2.is_some());
    let curve = DataFrame::new_infer_height(vec![
        Column::new("theta_cm_deg".into(), rows.iter().map(|r| r.0).collect::<Vec<_>>()),
        Column::new("dsdo_cm_mb_sr".into(), rows.iter().map(|r| r.1).collect::<Vec<_>>()),
        Column::new("ratio_rutherford".into(), rows.iter().map(|r| r.2).collect::<Vec<Option<f64>>>()),
        Column::new(
            stages::fit::RUTHERFORD_CONVENTION.into(),
            rows.iter().map(|_| has_ratio.then_some(data.rutherford_convention.name())).collect::<Vec<_>>(),
        ),
    ])?;
    Ok(FitOutput { report, curve })
}

/// Write `fit.yaml`, `fit.json`, `curve.csv`, `curve.parquet` (with the provenance record
/// in its metadata) and the record itself (`provenance.json`) into `dir`, atomically.
///
/// # Errors
/// A diagnostic naming the file that could not be written.
pub fn write(dir: &Path, out: &mut FitOutput, provenance_json: &str) -> Result<Vec<PathBuf>, Diagnostic> {
    let fail = |e: &dyn std::fmt::Display| Diagnostic::new(dir, "", format!("cannot encode the output: {e}"));
    let yaml = serde_yaml::to_string(&out.report).map_err(|e| fail(&e))?;
    let json = serde_json::to_string_pretty(&out.report).map_err(|e| fail(&e))? + "\n";
    let csv = csv_bytes(&mut out.curve).map_err(|e| fail(&e))?;
    let parquet = parquet_bytes(&mut out.curve, vec![(PROVENANCE_KEY.to_string(), provenance_json.into())])
        .map_err(|e| fail(&e))?;
    let files = [
        (dir.join("fit.yaml"), yaml.into_bytes()),
        (dir.join(FIT_JSON), json.into_bytes()),
        (dir.join("curve.csv"), csv),
        (dir.join("curve.parquet"), parquet),
        (dir.join(PROVENANCE_JSON), format!("{provenance_json}\n").into_bytes()),
    ];
    write_all_atomic(&files).map_err(|e| e.diagnostic())?;
    Ok(files.into_iter().map(|(path, _)| path).collect())
}
