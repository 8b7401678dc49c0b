//! Small helpers between polars tables and plain `f64`/`String` vectors. Stage tables hold
//! one row per detector × state, so stages read whole columns into vectors, compute with
//! the pure physics functions, and add the results as new columns.

use polars::prelude::*;

use crate::StageError;

/// The table's column names, comma separated, for error messages.
pub fn column_list(table: &DataFrame) -> String {
    table.get_column_names().iter().map(|n| n.as_str()).collect::<Vec<_>>().join(", ")
}

/// The column `name`, or an error that lists the columns found.
///
/// # Errors
/// [`StageError::MissingColumn`].
pub fn column<'a>(table: &'a DataFrame, name: &str) -> Result<&'a Column, StageError> {
    table.column(name).map_err(|_| StageError::MissingColumn { column: name.to_string(), found: column_list(table) })
}

/// A numeric column as `f64` values; a null, a non-number or a non-finite value is an error
/// naming the row.
///
/// # Errors
/// [`StageError::MissingColumn`], or [`StageError::BadValue`] for a null or non-finite value
/// or a column that is not numeric.
pub fn f64_values(table: &DataFrame, name: &str) -> Result<Vec<f64>, StageError> {
    let col = column(table, name)?;
    if !col.dtype().is_primitive_numeric() {
        return Err(StageError::BadValue {
            row: 1,
            column: name.to_string(),
            value: format!("a column of type {}", col.dtype()),
            expected: "numbers".into(),
        });
    }
    let cast = col.cast(&DataType::Float64)?;
    cast.f64()?
        .iter()
        .enumerate()
        .map(|(i, v)| match v {
            Some(x) if x.is_finite() => Ok(x),
            other => Err(StageError::BadValue {
                row: i + 1,
                column: name.to_string(),
                value: other.map_or("an empty cell".to_string(), |x| x.to_string()),
                expected: "a finite number".into(),
            }),
        })
        .collect()
}

/// A column as text (numbers are written in their shortest form); a null is an error.
///
/// # Errors
/// [`StageError::MissingColumn`], or [`StageError::BadValue`] for an empty cell.
pub fn str_values(table: &DataFrame, name: &str) -> Result<Vec<String>, StageError> {
    let cast = column(table, name)?.cast(&DataType::String)?;
    cast.str()?
        .iter()
        .enumerate()
        .map(|(i, v)| {
            v.map(str::to_string).ok_or_else(|| StageError::BadValue {
                row: i + 1,
                column: name.to_string(),
                value: "an empty cell".into(),
                expected: "a name".into(),
            })
        })
        .collect()
}

/// Add (or replace) `f64` columns.
///
/// # Errors
/// A column length that differs from the table height.
pub fn with_f64_columns(mut table: DataFrame, columns: Vec<(&str, Vec<f64>)>) -> Result<DataFrame, StageError> {
    for (name, values) in columns {
        table.with_column(Column::new(name.into(), values))?;
    }
    Ok(table)
}

/// The detector of each row, looked up in the set-up by the `detector` column.
///
/// # Errors
/// [`StageError::UnknownDetector`] for an id the config does not list.
pub fn row_detectors<'a>(
    table: &DataFrame,
    setup: &'a crate::Setup,
) -> Result<Vec<&'a crate::setup::DetectorConfig>, StageError> {
    str_values(table, "detector")?
        .into_iter()
        .enumerate()
        .map(|(i, id)| {
            setup.detector(&id).ok_or_else(|| StageError::UnknownDetector {
                row: i + 1,
                detector: id,
                known: setup.detector_ids(),
            })
        })
        .collect()
}
