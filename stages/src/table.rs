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
    let cast = as_f64(col, name)?;
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

/// A numeric column cast to f64.
fn as_f64(col: &Column, name: &str) -> Result<Column, StageError> {
    if !col.dtype().is_primitive_numeric() {
        return Err(StageError::BadValue {
            row: 1,
            column: name.to_string(),
            value: format!("a column of type {}", col.dtype()),
            expected: "numbers".into(),
        });
    }
    Ok(col.cast(&DataType::Float64)?)
}

/// A column that may be absent and may hold empty cells: `None` without the column, else one
/// value per row (`None` for an empty cell).
///
/// # Errors
/// A column that is not numeric, or a value that is not finite.
pub fn optional_f64_values(table: &DataFrame, name: &str) -> Result<Option<Vec<Option<f64>>>, StageError> {
    let Ok(col) = table.column(name) else { return Ok(None) };
    let cast = as_f64(col, name)?;
    let values: Vec<Option<f64>> = cast.f64()?.iter().collect();
    if let Some(i) = values.iter().position(|v| v.is_some_and(|x| !x.is_finite())) {
        return Err(StageError::BadValue {
            row: i + 1,
            column: name.to_string(),
            value: format!("{:?}", values[i]),
            expected: "a finite number or an empty cell".into(),
        });
    }
    Ok(Some(values))
}

/// Add each optional column `from` that the table has, multiplied row by row by `factors`,
/// under the name `to` (empty cells stay empty); columns the table lacks are skipped.
///
/// # Errors
/// As [`optional_f64_values`], or a table operation that fails.
pub fn with_scaled_optional_columns(
    mut table: DataFrame,
    pairs: &[(&str, &str)],
    factors: &[f64],
) -> Result<DataFrame, StageError> {
    for (from, to) in pairs {
        if let Some(values) = optional_f64_values(&table, from)? {
            let scaled: Vec<Option<f64>> = values.iter().zip(factors).map(|(v, k)| v.map(|v| v * k)).collect();
            table.with_column(Column::new((*to).into(), scaled))?;
        }
    }
    Ok(table)
}

/// A column's numbers as [`f64_values`], or `default` in every row when the table has no
/// such column (an optional input).
///
/// # Errors
/// As [`f64_values`] for a column that is there.
pub fn f64_values_or(table: &DataFrame, name: &str, default: f64) -> Result<Vec<f64>, StageError> {
    if table.column(name).is_ok() {
        f64_values(table, name)
    } else {
        Ok(vec![default; table.height()])
    }
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
/// A column length that differs from the table height (polars would broadcast a single
/// value; a stage always computes one value per row, so that is a defect, not a shortcut).
pub fn with_f64_columns(mut table: DataFrame, columns: Vec<(&str, Vec<f64>)>) -> Result<DataFrame, StageError> {
    for (name, values) in columns {
        if values.len() != table.height() {
            return Err(StageError::Table(PolarsError::ShapeMismatch(
                format!("column `{name}` has {} values for a table of {} rows", values.len(), table.height()).into(),
            )));
        }
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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::setup::testing::setup;

    /// The message of a result's error, or the values.
    fn outcome<T: std::fmt::Debug>(r: Result<T, StageError>) -> String {
        r.map_or_else(|e| e.to_string(), |v| format!("{v:?}"))
    }

    #[test]
    fn numbers_are_read_as_finite_f64_or_the_row_is_named() {
        // (column, what f64_values gives: the values or the whole message)
        let cases = [
            (Column::new("x".into(), [1i64, -2]), "[1.0, -2.0]"),
            (Column::new("x".into(), [1u32, 7]), "[1.0, 7.0]"),
            (Column::new("x".into(), [0.5f32, 2.25]), "[0.5, 2.25]"),
            (
                Column::new("x".into(), [Some(1.0), None]),
                "data row 2, column `x`: found an empty cell, expected a finite number",
            ),
            (
                Column::new("x".into(), [1.0, 2.0, f64::NAN]),
                "data row 3, column `x`: found NaN, expected a finite number",
            ),
            (Column::new("x".into(), [f64::INFINITY]), "data row 1, column `x`: found inf, expected a finite number"),
            (Column::new("x".into(), ["1.0"]), "data row 1, column `x`: found a column of type str, expected numbers"),
        ];
        for (column, want) in cases {
            let table = DataFrame::new_infer_height(vec![column.clone()]).expect("table");
            assert_eq!(outcome(f64_values(&table, "x")), want, "{column:?}");
        }
        let table = DataFrame::new_infer_height(vec![Column::new("a".into(), [1.0]), Column::new("b".into(), [2.0])])
            .expect("table");
        assert_eq!(outcome(f64_values(&table, "c")), "column `c` is missing; columns found: a, b");
    }

    #[test]
    fn names_are_read_as_text_in_their_shortest_form() {
        // (column, what str_values gives)
        let cases = [
            (Column::new("d".into(), ["D1", "D2"]), r#"["D1", "D2"]"#),
            (Column::new("d".into(), [7i64, 12]), r#"["7", "12"]"#),
            (Column::new("d".into(), [30.5f64]), r#"["30.5"]"#),
            (
                Column::new("d".into(), [Some("D1"), None]),
                "data row 2, column `d`: found an empty cell, expected a name",
            ),
        ];
        for (column, want) in cases {
            let table = DataFrame::new_infer_height(vec![column.clone()]).expect("table");
            assert_eq!(outcome(str_values(&table, "d")), want, "{column:?}");
        }
    }

    #[test]
    fn columns_are_added_or_replaced_at_the_table_height() {
        let base = || DataFrame::new_infer_height(vec![Column::new("a".into(), [1.0, 2.0])]).expect("table");
        // (columns to add, the table's columns afterwards and the values of `a`; None: refused)
        type Case = (Vec<(&'static str, Vec<f64>)>, Option<(&'static str, Vec<f64>)>);
        let cases: [Case; 4] = [
            (vec![("b", vec![3.0, 4.0])], Some(("a, b", vec![1.0, 2.0]))),
            (vec![("a", vec![5.0, 6.0])], Some(("a", vec![5.0, 6.0]))),
            (vec![("b", vec![3.0, 4.0, 5.0])], None),
            // polars alone would repeat a single value down the table.
            (vec![("b", vec![3.0])], None),
        ];
        for (columns, want) in cases {
            let got = with_f64_columns(base(), columns.clone()).ok().map(|t| {
                let a = f64_values(&t, "a").expect("a");
                (column_list(&t), a)
            });
            assert_eq!(got.as_ref().map(|(l, a)| (l.as_str(), a.clone())), want, "{columns:?}");
        }
    }

    #[test]
    fn each_row_finds_its_detector_or_names_the_unknown_one() {
        let setup = setup(
            "[{ id: D1, theta_lab_deg: 30.0, aperture: { shape: given, solid_angle_msr: 1.0 } },
              { id: D2, theta_lab_deg: 50.0, aperture: { shape: given, solid_angle_msr: 2.0 } }]",
        );
        // (detector column, the angles found or the whole message)
        let cases = [
            (vec!["D2", "D1", "D2"], "[50.0, 30.0, 50.0]"),
            (vec!["D1", "D3"], "data row 2: detector `D3` is not among the config's detectors (D1, D2)"),
        ];
        for (ids, want) in cases {
            let table = DataFrame::new_infer_height(vec![Column::new("detector".into(), ids.clone())]).expect("table");
            let got = row_detectors(&table, &setup).map(|d| d.iter().map(|d| d.theta_lab_deg).collect::<Vec<_>>());
            assert_eq!(outcome(got), want, "{ids:?}");
        }
    }
}
