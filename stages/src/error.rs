//! Errors a stage can raise while running on one run's table.

use crate::physics::PhysicsError;
use polars::prelude::PolarsError;

/// Which input a problem comes from, so that the message names the right file.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Origin {
    /// The run's yields table.
    Table,
    /// The run record.
    RunRecord,
    /// The experiment config.
    Config,
}

impl StageError {
    /// The input that holds the value to fix.
    pub fn origin(&self) -> Origin {
        match self {
            StageError::MissingRunValue { .. } | StageError::RunRecordValue(_) => Origin::RunRecord,
            StageError::NoSetup { .. } => Origin::Config,
            StageError::Physics { origin, .. } => *origin,
            _ => Origin::Table,
        }
    }
}

/// Why a stage could not finish a run. Every variant names what is needed to find and fix
/// the problem: the column, the data row (1-based), the value.
#[derive(Debug, thiserror::Error)]
pub enum StageError {
    /// A column the stage needs is not in the table.
    #[error("column `{column}` is missing; columns found: {found}")]
    MissingColumn {
        /// The column needed.
        column: String,
        /// The columns that are there, comma separated.
        found: String,
    },
    /// A value the stage cannot use.
    #[error("data row {row}, column `{column}`: found {value}, expected {expected}")]
    BadValue {
        /// Data row, 1-based (the line in a CSV file with a header is one more).
        row: usize,
        /// The column.
        column: String,
        /// The value found.
        value: String,
        /// What is accepted.
        expected: String,
    },
    /// A detector id that the config does not list.
    #[error("data row {row}: detector `{detector}` is not among the config's detectors ({known})")]
    UnknownDetector {
        /// Data row, 1-based.
        row: usize,
        /// The id found.
        detector: String,
        /// The ids the config knows, comma separated.
        known: String,
    },
    /// The run record lacks a value the stage needs.
    #[error("the run record has no `{key}`, which {needed_by} needs")]
    MissingRunValue {
        /// The run-record key.
        key: String,
        /// The stage and setting that need it.
        needed_by: String,
    },
    /// A run-record value the stage cannot use (its `check_run` reports the same).
    #[error("the run record's {0}")]
    RunRecordValue(crate::Problem),
    /// A stage was built without part of the set-up it needs (the resolved reaction, a
    /// state's channel). Planning refuses such a config, so this is an internal defect, not
    /// a missing key of the user's run record.
    #[error("{stage} was built without {what} from the config's set-up (a defect of xsflow: the config check should have refused it)")]
    NoSetup {
        /// The stage and setting.
        stage: String,
        /// What it lacks.
        what: String,
    },
    /// A physics formula outside its range of validity.
    #[error("{context}: {source}")]
    Physics {
        /// Where: detector, row or run quantity.
        context: String,
        /// What went wrong.
        source: PhysicsError,
        /// Which input holds the value to fix.
        origin: Origin,
    },
    /// The table library failed.
    #[error("table operation failed: {0}")]
    Table(#[from] PolarsError),
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn each_error_names_the_input_to_fix() {
        // (error, the file its message is reported against)
        let cases = [
            (StageError::MissingColumn { column: "c".into(), found: "a, b".into() }, Origin::Table),
            (StageError::MissingRunValue { key: "charge_c".into(), needed_by: "normalise".into() }, Origin::RunRecord),
            // Issue 11: an internal lack of set-up was reported as a key missing from the run
            // record, sending the user to the wrong file.
            (StageError::NoSetup { stage: "compute_kinematics".into(), what: "the reaction".into() }, Origin::Config),
        ];
        for (e, origin) in cases {
            assert_eq!(e.origin(), origin, "{e}");
        }
    }
}
