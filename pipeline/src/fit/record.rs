//! How a fit's outputs were made: the program, the experiment config whose `fits:` entry
//! it is (if any), the fit file and the data that went in, each with its hash.

use std::path::{Path, PathBuf};

use crate::error::Diagnostic;
use crate::provenance::{record_time_s, rfc3339_utc, sha256_file, sha256_hex, InputFile, Provenance};

use super::{Experiment, LoadedFit};

/// How a fit's outputs were made.
#[derive(Debug, Clone, serde::Serialize)]
pub struct FitProvenance {
    /// Always `xsflow`.
    pub program: &'static str,
    /// Program version.
    pub version: &'static str,
    /// The experiment config whose `fits:` entry made the fit, by its name (relative to its
    /// own folder, like the inputs); `null` for `xsflow fit`, which reads no config.
    pub config_file: Option<String>,
    /// SHA-256 of that config file, as in the records of its runs; `null` without one.
    pub config_sha256: Option<String>,
    /// The fit file: relative to the config's folder for a `fits:` entry, as given to
    /// `xsflow fit`.
    pub fit_file: String,
    /// SHA-256 of the fit file.
    pub fit_sha256: String,
    /// The data files with their hashes.
    pub inputs: Vec<InputFile>,
    /// When the record was made, UTC, RFC 3339 (`SOURCE_DATE_EPOCH` when set).
    pub created_utc: String,
}

/// The provenance record of a fit, as JSON: every data file is hashed (paths relative to
/// `base`).
///
/// # Errors
/// A data file that cannot be read (gone since it was fitted, say), named with the OS error.
pub fn provenance_json(loaded: &LoadedFit, data_files: &[PathBuf], base: &Path) -> Result<String, Diagnostic> {
    let inputs = data_files
        .iter()
        .map(|f| {
            sha256_file(f).map(|sha| Provenance::input_hashed(base, f, sha)).map_err(|e| {
                Diagnostic::new(f, "", format!("cannot read the data file to hash it for the fit's provenance: {e}"))
                    .with_help("nothing was written; make the file readable (or restore it) and fit again")
            })
        })
        .collect::<Result<Vec<_>, _>>()?;
    FitProvenance::new(loaded, loaded.path.to_string_lossy().into_owned(), None, inputs).to_json(loaded)
}

impl FitProvenance {
    /// The record of a fit of `loaded` (named `fit_file` in the record) on `inputs`, made now,
    /// for the `fits:` entry of `experiment` or, without one, for `xsflow fit`.
    pub fn new(
        loaded: &LoadedFit,
        fit_file: String,
        experiment: Option<&Experiment<'_>>,
        inputs: Vec<InputFile>,
    ) -> Self {
        let config_name = |e: &Experiment<'_>| {
            let name = e.config_path.file_name().unwrap_or(e.config_path.as_os_str());
            name.to_string_lossy().into_owned()
        };
        FitProvenance {
            program: "xsflow",
            version: env!("CARGO_PKG_VERSION"),
            config_file: experiment.map(config_name),
            config_sha256: experiment.map(|e| e.config_sha256.to_string()),
            fit_file,
            fit_sha256: sha256_hex(&loaded.bytes),
            inputs,
            created_utc: rfc3339_utc(record_time_s()),
        }
    }

    /// The record as pretty JSON.
    ///
    /// # Errors
    /// The encoder's error, against the fit file.
    pub fn to_json(&self, loaded: &LoadedFit) -> Result<String, Diagnostic> {
        serde_json::to_string_pretty(self)
            .map_err(|e| Diagnostic::new(&loaded.path, "", format!("cannot encode the fit's provenance: {e}")))
    }
}
