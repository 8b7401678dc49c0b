//! The stages of the xsflow reduction and the physics underneath them.
//!
//! A run's yields table (one row per detector × state) enters the first stage; each stage
//! adds columns (live fraction, efficiency, solid angle, normalisation, cross section) and
//! hands the table on. Stages receive tables and numbers, never paths or command-line flags:
//! the `xsflow` pipeline crate reads files, builds the stages (one module each, in
//! [`stage`]) from the config through [`registry`], and writes the outputs. Pure physics lives in [`physics`] as functions on
//! `f64`, each with its formula and published source.

pub mod columns;
pub mod combine;
mod error;
pub mod fit;
pub mod physics;
mod problem;
pub mod raw;
pub mod registry;
pub mod setup;
pub mod simulate;
pub mod stage;
pub mod table;
pub mod theory;
pub mod yields;

pub use error::{Origin, StageError};
pub use polars;
pub use problem::{join_key as problem_key, Problem};
pub use registry::StageConfig;
pub use setup::{RunContext, RunRecord, Setup};

use polars::prelude::DataFrame;

/// One step of the reduction: a table in, the same table with more columns out.
///
/// `build` (on the config struct) checks every setting once, so `run` never re-checks.
/// `needs` and `adds` let `xsflow check` find a missing column before any run is read.
pub trait Stage: Send + Sync {
    /// The stage's `type:` key in the config.
    fn name(&self) -> &'static str;
    /// Columns the stage reads; each must be present when the stage starts.
    fn needs(&self) -> Vec<&'static str>;
    /// Columns the stage adds (or replaces).
    fn adds(&self) -> Vec<&'static str>;
    /// Run the stage on one run's table.
    ///
    /// # Errors
    /// A value in the table or the run record that the stage cannot use (the error names
    /// the row, column and value), or a table operation that fails.
    fn run(&self, table: DataFrame, ctx: &RunContext<'_>) -> Result<DataFrame, StageError>;
    /// Problems of a run record for this stage (a value it needs that the record lacks),
    /// found without reading the run's data; keys are the record's own.
    fn check_run(&self, _run: &RunRecord) -> Vec<Problem> {
        Vec::new()
    }
}
