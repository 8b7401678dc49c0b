//! What a fit reads: the fit file (and the theory curve of a `curve` model), checked
//! against the experiment it fits, and the reduced data (a cross-section table, or the
//! runs of a `reduce` output folder stacked).

use std::path::{Path, PathBuf};

use polars::prelude::{Column, DataFrame};
use stages::fit::{CurveTable, Fit, FitModelConfig};

use crate::config::YamlFile;
use crate::error::Diagnostic;
use crate::layout::CROSS_SECTIONS_PARQUET;
use crate::tables::{is_csv, read_table};

use super::FitError;

/// A fit file, read, checked and built.
pub struct LoadedFit {
    /// The fit file.
    pub path: PathBuf,
    /// Its bytes (hashed for provenance).
    pub bytes: Vec<u8>,
    /// The model's name.
    pub model: &'static str,
    /// The fit.
    pub fit: Fit,
}

/// Read a fit file and, for a `curve` model, its curve table (relative to the fit file);
/// with the `experiment` it fits, check that its reaction is that experiment's.
///
/// # Errors
/// Every problem of the file or of the curve, located.
pub fn load(path: &Path, experiment: Option<&stages::Setup>) -> Result<LoadedFit, Vec<Diagnostic>> {
    let file = YamlFile::read(path).map_err(|d| vec![d])?;
    let config: FitModelConfig = file.parse("", &file.value).map_err(|d| vec![d])?;
    let mismatches = experiment.map(|s| config.check_against(s)).unwrap_or_default();
    if !mismatches.is_empty() {
        return Err(mismatches.iter().map(|p| file.problem(p)).collect());
    }
    let curve = match &config {
        FitModelConfig::Curve { file: curve_file, .. } => {
            let curve_path = path.parent().unwrap_or(Path::new(".")).join(curve_file);
            Some(read_curve(&curve_path).map_err(|d| vec![d])?)
        }
        _ => None,
    };
    let fit = config.build(curve).map_err(|ps| ps.iter().map(|p| file.problem(p)).collect::<Vec<_>>())?;
    Ok(LoadedFit { path: path.to_path_buf(), bytes: file.bytes, model: config.name(), fit })
}

/// Read a theory curve table (columns `theta_cm_deg`, `dsdo_cm_mb_sr`; the CSV of
/// `xsflow theory --format csv` is one).
fn read_curve(path: &Path) -> Result<CurveTable, Diagnostic> {
    let table = read_table(path).map_err(|e| {
        Diagnostic::new(path, "", e.to_string()).with_help("a curve table has columns theta_cm_deg, dsdo_cm_mb_sr")
    })?;
    let col = |name| stages::table::f64_values(&table, name).map_err(|e| Diagnostic::new(path, "", e.to_string()));
    CurveTable::new(col("theta_cm_deg")?, col("dsdo_cm_mb_sr")?).map_err(|p| {
        // A CSV data row i is on line i + 2 (header first).
        let line = p
            .key
            .strip_prefix("row ")
            .and_then(|r| r.split('.').next())
            .and_then(|r| r.parse::<usize>().ok())
            .filter(|_| is_csv(path))
            .map(|r| (r + 2, 1));
        Diagnostic::new(path, &p.key, format!("found {}, expected {}", p.found, p.expected)).at(line)
    })
}

/// Read the reduced data: a cross-section table, or a `reduce` output folder (every
/// `*/cross_sections.parquet` in it, stacked in folder-name order).
///
/// # Errors
/// Unreadable files or folders, a folder without reduced runs, tables that do not stack.
pub fn read_data(path: &Path) -> Result<(DataFrame, Vec<PathBuf>), Diagnostic> {
    if !path.is_dir() {
        return read_table(path)
            .map(|t| (t, vec![path.to_path_buf()]))
            .map_err(|e| Diagnostic::new(path, "", e.to_string()));
    }
    let pattern = path.join("*").join(CROSS_SECTIONS_PARQUET);
    let matches = glob::glob(&pattern.to_string_lossy()).map_err(|e| {
        Diagnostic::new(path, "", format!("cannot search the folder for reduced runs ({e})"))
            .with_help("rename the folder without the glob characters * ? [ ]")
    })?;
    // A folder that cannot be read could hold a run: an error, never a run left out.
    let mut files = matches
        .map(|m| m.map_err(|e| Diagnostic::new(e.path(), "", format!("cannot read it: {}", e.error()))))
        .collect::<Result<Vec<PathBuf>, _>>()?;
    files.sort();
    if files.is_empty() {
        return Err(Diagnostic::new(path, "", "no reduced runs found (looked for */cross_sections.parquet)")
            .with_help("give a cross-section table or the output folder of `xsflow reduce`"));
    }
    let mut tables = Vec::new();
    for f in &files {
        tables.push(read_table(f).map_err(|e| Diagnostic::new(f, "", e.to_string()))?);
    }
    Ok((stack(tables).map_err(|e| Diagnostic::new(path, "", e.to_string()))?, files))
}

/// Stack tables with the columns the fit reads (and `run`, `detector`, and the counts
/// where present) in that order.
///
/// # Errors
/// A table without one of the columns, or columns of different types.
pub fn stack(tables: Vec<DataFrame>) -> Result<DataFrame, FitError> {
    let mut names: Vec<&str> = vec!["run", "detector", "members", stages::fit::RUTHERFORD_CONVENTION];
    names.extend(stages::fit::FIT_COLUMNS);
    names.extend(stages::fit::COUNT_COLUMNS);
    let mut out: Option<DataFrame> = None;
    for t in tables {
        let cols = names
            .iter()
            .filter(|n| t.column(n).is_ok())
            .map(|n| t.column(n).cloned())
            .collect::<Result<Vec<Column>, _>>()?;
        let part = DataFrame::new_infer_height(cols)?;
        out = Some(match out {
            None => part,
            Some(mut acc) => {
                acc.vstack_mut(&part).map_err(FitError::Stack)?;
                acc
            }
        });
    }
    out.ok_or(FitError::NoTables)
}

/// The state to fit: the given one, or the only state of the table.
///
/// # Errors
/// No state given and the table holds several (they are listed), a state given that the
/// table does not hold, or no `state` column.
pub fn choose_state(table: &DataFrame, state: Option<&str>) -> Result<String, FitError> {
    let mut states = stages::table::str_values(table, "state")?;
    states.sort();
    states.dedup();
    match (state, states.as_slice()) {
        (Some(s), _) if states.iter().any(|t| t == s) => Ok(s.to_string()),
        (Some(s), _) => Err(FitError::StateAbsent { state: s.to_string(), states }),
        (None, [one]) => Ok(one.clone()),
        (None, _) => Err(FitError::SeveralStates { states }),
    }
}
