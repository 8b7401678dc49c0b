//! The yields table: the stable interface between peak finding (upstream: list-mode events,
//! spectra, or counts typed by hand) and the reduction. One row per detector × state.
//!
//! [`prepare`] checks a yields table read from a run file and turns it into the first stage
//! table: columns cast to their types, the run id and the detector's lab angle added, rows in
//! a stable order (detector in config order, then state by name, then branch).

use std::collections::HashMap;

use polars::prelude::*;
use schemars::JsonSchema;

use crate::table::{column_list, f64_values, str_values};
use crate::{Setup, StageError};

/// One row of a yields table, as read from a run's yields file (CSV or Parquet). This type
/// documents the columns and generates `schemas/yields.schema.json`.
#[derive(Debug, Clone, JsonSchema)]
#[allow(dead_code)]
pub struct YieldsRow {
    /// Detector id, as in the config's `detectors[].id` (text or a whole number). Required.
    pub detector: String,
    /// State (peak) name, such as `elastic` or `2+_1.454`. Required.
    pub state: String,
    /// Gross counts in the peak window, a finite number >= 0. Required.
    pub counts_gross: f64,
    /// Background counts under the peak (side bands or a fit), >= 0. Optional, default 0.
    pub counts_background: Option<f64>,
    /// Standard uncertainty of the background counts, >= 0. Optional, default sqrt of the
    /// background (Poisson).
    pub counts_background_err: Option<f64>,
    /// The fraction of the peak's counts that the window and background subtraction keep,
    /// in (0, 1]; the net counts are divided by it. Optional, default 1 (xsflow writes it
    /// for yields it derives from events or spectra).
    pub window_acceptance: Option<f64>,
    /// Standard uncertainty of `window_acceptance`, >= 0 (a point-to-point systematic).
    /// Optional, default 0.
    pub window_acceptance_err: Option<f64>,
    /// Measured lab energy of the peak in MeV, > 0; picks the kinematic solution where a
    /// lab angle is double valued. Optional.
    pub peak_energy_lab_mev: Option<f64>,
    /// Kinematic branch of the peak where the lab angle is double valued: 1 (higher
    /// energy) or 2. Optional; takes precedence over `peak_energy_lab_mev`.
    pub branch: Option<i32>,
}

/// Columns every yields table must have.
pub const REQUIRED_COLUMNS: [&str; 3] = ["detector", "state", "counts_gross"];
/// Columns a yields table may have.
pub const OPTIONAL_COLUMNS: [&str; 6] = [
    "counts_background",
    "counts_background_err",
    "window_acceptance",
    "window_acceptance_err",
    "peak_energy_lab_mev",
    "branch",
];
/// Columns [`prepare`] adds in front.
pub const ADDED_COLUMNS: [&str; 3] = ["run", "theta_lab_deg", "theta_lab_err_deg"];

/// At most this many bad values are listed for one table; the rest are counted.
const MAX_LISTED: usize = 20;

/// What a finite value of the numeric yields column `column` must be, when `x` is not
/// that; `None` when it is.
fn value_problem(column: &str, x: f64) -> Option<&'static str> {
    match column {
        "peak_energy_lab_mev" => (x <= 0.0).then_some("an energy > 0 MeV"),
        "branch" => (![1.0, 2.0].contains(&x)).then_some("branch 1 (the higher-energy solution) or 2"),
        "window_acceptance" => (!(x > 0.0 && x <= 1.0)).then_some("a fraction in (0, 1]"),
        "window_acceptance_err" => (x < 0.0).then_some("an uncertainty >= 0"),
        _ => (x < 0.0).then_some("a count >= 0"),
    }
}

/// A checked yields table and the notes that did not stop it.
#[derive(Debug)]
pub struct Prepared {
    /// The first stage table.
    pub table: DataFrame,
    /// Columns of the file that are not part of the yields interface (ignored).
    pub ignored_columns: Vec<String>,
}

/// Check a yields table and build the first stage table from it.
///
/// # Errors
/// Every problem found (missing columns listing the columns found, unknown detectors,
/// empty, negative or non-finite counts, peak energies <= 0, branches other than 1 or 2,
/// duplicate detector × state rows), up to 20 listed.
pub fn prepare(table: &DataFrame, setup: &Setup, run: &str) -> Result<Prepared, Vec<StageError>> {
    let missing: Vec<StageError> = REQUIRED_COLUMNS
        .iter()
        .filter(|c| table.column(c).is_err())
        .map(|c| StageError::MissingColumn { column: (*c).to_string(), found: column_list(table) })
        .collect();
    if !missing.is_empty() {
        return Err(missing);
    }
    let mut errors = Vec::new();
    let mut keep = |r: Result<Vec<String>, StageError>| r.map_err(|e| errors.push(e)).unwrap_or_default();
    let detectors = keep(str_values(table, "detector"));
    let states = keep(str_values(table, "state"));
    let mut numeric: HashMap<&str, Vec<f64>> = HashMap::new();
    for name in ["counts_gross"].iter().chain(&OPTIONAL_COLUMNS) {
        if table.column(name).is_ok() {
            match f64_values(table, name) {
                Ok(v) => {
                    for (i, x) in v.iter().enumerate() {
                        if let Some(expected) = value_problem(name, *x) {
                            errors.push(StageError::BadValue {
                                row: i + 1,
                                column: (*name).to_string(),
                                value: x.to_string(),
                                expected: expected.into(),
                            });
                        }
                    }
                    numeric.insert(name, v);
                }
                Err(e) => errors.push(e),
            }
        }
    }
    // A double-valued lab angle shows two peaks of one state: the branch tells them apart.
    let branch_of = |i: usize| numeric.get("branch").map_or(0, |b| b[i] as i64);
    let mut order = Vec::with_capacity(detectors.len());
    let mut seen = HashMap::new();
    for (i, (det, state)) in detectors.iter().zip(&states).enumerate() {
        match setup.detector_index(det) {
            None => errors.push(StageError::UnknownDetector {
                row: i + 1,
                detector: det.clone(),
                known: setup.detector_ids(),
            }),
            Some(d) => order.push((d, state.clone(), branch_of(i), i)),
        }
        if state.trim().is_empty() {
            errors.push(StageError::BadValue {
                row: i + 1,
                column: "state".into(),
                value: "an empty name".into(),
                expected: "a state name such as elastic".into(),
            });
        }
        if let Some(first) = seen.insert((det.clone(), state.clone(), branch_of(i)), i) {
            errors.push(StageError::BadValue {
                row: i + 1,
                column: "state".into(),
                value: format!("detector {det}, state {state} again (first at data row {})", first + 1),
                expected: "one row per detector, state (and branch, where a `branch` column is given)".into(),
            });
        }
    }
    if !errors.is_empty() {
        let n = errors.len();
        errors.truncate(MAX_LISTED);
        if n > MAX_LISTED {
            errors.push(StageError::BadValue {
                row: 0,
                column: "(all)".into(),
                value: format!("{} more problems", n - MAX_LISTED),
                expected: "a clean table".into(),
            });
        }
        return Err(errors);
    }
    order.sort();
    let rows: Vec<usize> = order.iter().map(|(_, _, _, i)| *i).collect();
    let pick_str = |v: &[String]| rows.iter().map(|&i| v[i].clone()).collect::<Vec<_>>();
    let pick = |v: &[f64]| rows.iter().map(|&i| v[i]).collect::<Vec<_>>();
    let dets: Vec<_> = order.iter().map(|(d, _, _, _)| &setup.detectors[*d]).collect();
    let mut columns = vec![
        Column::new("run".into(), vec![run.to_string(); rows.len()]),
        Column::new("detector".into(), pick_str(&detectors)),
        Column::new("state".into(), pick_str(&states)),
        Column::new("theta_lab_deg".into(), dets.iter().map(|d| d.theta_lab_deg).collect::<Vec<_>>()),
        Column::new("theta_lab_err_deg".into(), dets.iter().map(|d| d.theta_lab_err_deg).collect::<Vec<_>>()),
    ];
    for name in ["counts_gross"].iter().chain(&OPTIONAL_COLUMNS) {
        if let Some(v) = numeric.get(name) {
            if *name == "branch" {
                // Checked above to be 1 or 2.
                columns.push(Column::new((*name).into(), pick(v).iter().map(|b| *b as i32).collect::<Vec<_>>()));
            } else {
                columns.push(Column::new((*name).into(), pick(v)));
            }
        }
    }
    let table_out = DataFrame::new_infer_height(columns).map_err(|e| vec![StageError::Table(e)])?;
    let known: Vec<&str> = REQUIRED_COLUMNS.iter().chain(&OPTIONAL_COLUMNS).copied().collect();
    let ignored_columns =
        table.get_column_names().iter().map(|c| c.to_string()).filter(|c| !known.contains(&c.as_str())).collect();
    Ok(Prepared { table: table_out, ignored_columns })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn values_are_checked_by_column() {
        // (column, value, accepted)
        let cases = [
            ("counts_gross", 0.0, true),
            ("counts_gross", 12.5, true),
            ("counts_gross", -1.0, false),
            ("counts_background", -0.5, false),
            ("counts_background_err", 3.0, true),
            ("peak_energy_lab_mev", 21.3, true),
            ("peak_energy_lab_mev", 0.0, false),
            ("peak_energy_lab_mev", -2.0, false),
            ("branch", 1.0, true),
            ("branch", 2.0, true),
            // Issue 11, defect 2: these were read as branch 1 and 2 without a word.
            ("branch", 0.0, false),
            ("branch", 7.0, false),
            ("branch", 1.5, false),
            ("branch", -1.0, false),
            ("window_acceptance", 0.997, true),
            ("window_acceptance", 1.0, true),
            ("window_acceptance", 0.0, false),
            ("window_acceptance", 1.2, false),
            ("window_acceptance_err", 0.0, true),
            ("window_acceptance_err", -1e-3, false),
        ];
        for (column, x, accepted) in cases {
            assert_eq!(value_problem(column, x).is_none(), accepted, "{column} = {x}");
        }
    }
}
