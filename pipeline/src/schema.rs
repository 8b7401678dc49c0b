//! JSON Schemas generated from the Rust types: the experiment config, the run record, the
//! yields and cross-section tables, the theory model file and the fit file. The committed copies in `schemas/` are checked
//! against these by a test.

use schemars::schema_for;

use crate::config::ExperimentConfig;

/// The schemas by name, each with its file name in `schemas/`.
pub const NAMES: [&str; 6] = ["config", "run", "yields", "cross_sections", "model", "fit"];

/// The schema called `name`, pretty JSON with a final newline; `None` for an unknown name.
pub fn schema_json(name: &str) -> Option<String> {
    let schema = match name {
        "config" => schema_for!(ExperimentConfig),
        "run" => schema_for!(stages::RunRecord),
        "yields" => schema_for!(stages::yields::YieldsRow),
        "cross_sections" => schema_for!(stages::columns::CrossSectionRow),
        "model" => schema_for!(stages::theory::ModelConfig),
        "fit" => schema_for!(stages::fit::FitModelConfig),
        _ => return None,
    };
    serde_json::to_string_pretty(&schema).ok().map(|s| s + "\n")
}

/// File name of a schema in `schemas/`.
pub fn file_name(name: &str) -> String {
    format!("{name}.schema.json")
}
