//! What the pipeline reports: a located problem (file, line, column, key path, what was
//! found and what is accepted, and what to do next).

use std::fmt;
use std::path::{Path, PathBuf};

use serde::Serialize;

/// One problem, located as precisely as the input allows.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct Diagnostic {
    /// The file the problem is in.
    pub file: PathBuf,
    /// Line (1-based), when known.
    pub line: Option<usize>,
    /// Column (1-based), when known.
    pub column: Option<usize>,
    /// Key path in a YAML file (`detectors[3].aperture.radius_mm`), or a table place
    /// (`data row 4, column counts_gross`); empty for the whole file.
    pub key: String,
    /// What is wrong: found and expected.
    pub message: String,
    /// What to do next, when there is something specific to say.
    pub help: Option<String>,
}

impl Diagnostic {
    /// A problem in `file` at `key`, not yet located to a line.
    pub fn new(file: &Path, key: impl Into<String>, message: impl Into<String>) -> Self {
        Diagnostic {
            file: file.to_path_buf(),
            line: None,
            column: None,
            key: key.into(),
            message: message.into(),
            help: None,
        }
    }

    /// Add a help line.
    #[must_use]
    pub fn with_help(mut self, help: impl Into<String>) -> Self {
        self.help = Some(help.into());
        self
    }

    /// Set line and column.
    #[must_use]
    pub fn at(mut self, place: Option<(usize, usize)>) -> Self {
        if let Some((line, column)) = place {
            self.line = Some(line);
            self.column = Some(column);
        }
        self
    }
}

impl fmt::Display for Diagnostic {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}", self.file.display())?;
        if let Some(line) = self.line {
            write!(f, ":{line}")?;
            if let Some(col) = self.column {
                write!(f, ":{col}")?;
            }
        }
        if self.key.is_empty() {
            write!(f, " {}", self.message)?;
        } else {
            write!(f, " {}: {}", self.key, self.message)?;
        }
        if let Some(help) = &self.help {
            write!(f, "\n  help: {help}")?;
        }
        Ok(())
    }
}

/// A run that could not be reduced, with every problem found.
#[derive(Debug, Clone, Serialize)]
pub struct RunFailure {
    /// The run id (or the record file name when the record did not parse).
    pub run: String,
    /// What went wrong.
    pub problems: Vec<Diagnostic>,
}

/// Diagnostics as text, one block each (for stderr).
pub fn render(diagnostics: &[Diagnostic]) -> String {
    diagnostics.iter().map(|d| format!("{d}\n")).collect()
}

/// Run `work`, turning a panic (a defect of xsflow, never the user's input) into a failure
/// of that one run or fit, reported against `file` with the panic's message, so that the
/// other runs of a batch still finish. The panic's default report on stderr stays.
///
/// # Errors
/// The panic's message.
pub fn without_panics<T>(file: &Path, work: impl FnOnce() -> T) -> Result<T, Diagnostic> {
    std::panic::catch_unwind(std::panic::AssertUnwindSafe(work)).map_err(|payload| {
        let message = payload
            .downcast_ref::<&str>()
            .map(|s| (*s).to_string())
            .or_else(|| payload.downcast_ref::<String>().cloned())
            .unwrap_or_else(|| "no message".into());
        Diagnostic::new(file, "", format!("internal error (a defect of xsflow, not of this input): {message}"))
            .with_help("the other runs went on; please report this with the run's files")
    })
}
