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

use polars::prelude::{Column, DataFrame};
use stages::fit::{FitData, FitReport};
use stages::physics::model_fit::NORMALISATION;

pub use entries::{plan_fit, run_fits, Experiment, FitCounts, FitProblem, PlannedFit};
pub use input::{choose_state, load, read_data, stack, LoadedFit};
pub use record::{provenance_json, FitProvenance};
pub use render::{render, render_text};

use crate::error::Diagnostic;
use crate::layout::{FIT_JSON, PROVENANCE_JSON, PROVENANCE_KEY};
use crate::tables::{csv_bytes, parquet_bytes, write_all_atomic};

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
pub fn run(loaded: &LoadedFit, table: &DataFrame, state: &str) -> Result<FitOutput, String> {
    let data = FitData::from_table(table, state).map_err(|e| e.to_string())?;
    let (report, values) = loaded.fit.run(&data, state, loaded.model).map_err(|e| e.to_string())?;
    let nu = report.parameters.iter().find(|p| p.name == NORMALISATION).map_or(1.0, |p| p.value);
    // Half-degree steps from 2° before the first point to 2° after the last, inside the
    // range where the model is defined (a curve model: its table).
    let (first, last) = (data.theta_cm_deg[0], data.theta_cm_deg[data.theta_cm_deg.len() - 1]);
    let (min, max) = loaded.fit.angle_range_deg();
    let (lo, hi) = ((first - 2.0).max(min), (last + 2.0).min(max));
    let angles: Vec<f64> = (0..).map(|i| lo + 0.5 * f64::from(i)).take_while(|a| *a <= hi).collect();
    let rows = loaded.fit.curve(&values, nu, &angles, data.rutherford_convention)?;
    let has_ratio = rows.iter().any(|r| r.2.is_some());
    let curve = DataFrame::new_infer_height(vec![
        Column::new("theta_cm_deg".into(), rows.iter().map(|r| r.0).collect::<Vec<_>>()),
        Column::new("dsdo_cm_mb_sr".into(), rows.iter().map(|r| r.1).collect::<Vec<_>>()),
        Column::new("ratio_rutherford".into(), rows.iter().map(|r| r.2).collect::<Vec<Option<f64>>>()),
        Column::new(
            stages::fit::RUTHERFORD_CONVENTION.into(),
            rows.iter().map(|_| has_ratio.then_some(data.rutherford_convention.name())).collect::<Vec<_>>(),
        ),
    ])
    .map_err(|e| e.to_string())?;
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
