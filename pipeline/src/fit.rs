//! `xsflow fit DATA MODEL` and the `fit` stage of a config: read the fit file (and the
//! theory curve of a `curve` model), fit the reduced angular distribution of one state,
//! write `fit.yaml`, `fit.json` and the best curve (`curve.csv`, `curve.parquet`).

use std::fmt::Write as _;
use std::path::{Path, PathBuf};

use polars::prelude::{Column, DataFrame};
use stages::fit::{CurveTable, Fit, FitData, FitModelConfig, FitReport};
use stages::physics::model_fit::NORMALISATION;

use crate::config::YamlFile;
use crate::error::Diagnostic;
use crate::provenance::{record_time_s, rfc3339_utc, sha256_file, sha256_hex, InputFile, Provenance};
use crate::tables::{csv_bytes, is_csv, parquet_bytes, read_table, write_all_atomic};

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
    let table = read_table(path)
        .map_err(|m| Diagnostic::new(path, "", m).with_help("a curve table has columns theta_cm_deg, dsdo_cm_mb_sr"))?;
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
        return read_table(path).map(|t| (t, vec![path.to_path_buf()])).map_err(|m| Diagnostic::new(path, "", m));
    }
    let pattern = path.join("*").join(crate::run::CROSS_SECTIONS_PARQUET);
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
        tables.push(read_table(f).map_err(|m| Diagnostic::new(f, "", m))?);
    }
    Ok((stack(tables).map_err(|m| Diagnostic::new(path, "", m))?, files))
}

/// How a fit's outputs were made.
#[derive(Debug, Clone, serde::Serialize)]
pub struct FitProvenance {
    /// Always `xsflow`.
    pub program: &'static str,
    /// Program version.
    pub version: &'static str,
    /// The fit file, as given.
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
    let record = FitProvenance {
        program: "xsflow",
        version: env!("CARGO_PKG_VERSION"),
        fit_file: loaded.path.to_string_lossy().into_owned(),
        fit_sha256: sha256_hex(&loaded.bytes),
        inputs,
        created_utc: rfc3339_utc(record_time_s()),
    };
    serde_json::to_string_pretty(&record)
        .map_err(|e| Diagnostic::new(&loaded.path, "", format!("cannot encode the fit's provenance: {e}")))
}

/// Stack tables with the columns the fit reads (and `run`, `detector`) in that order.
///
/// # Errors
/// A table without one of the columns, or columns of different types.
pub fn stack(tables: Vec<DataFrame>) -> Result<DataFrame, String> {
    let mut names: Vec<&str> = vec!["run", "detector", "members", stages::fit::RUTHERFORD_CONVENTION];
    names.extend(stages::fit::FIT_COLUMNS);
    let mut out: Option<DataFrame> = None;
    for t in tables {
        let cols = names
            .iter()
            .filter(|n| t.column(n).is_ok())
            .map(|n| t.column(n).cloned().map_err(|e| e.to_string()))
            .collect::<Result<Vec<Column>, _>>()?;
        let part = DataFrame::new_infer_height(cols).map_err(|e| e.to_string())?;
        out = Some(match out {
            None => part,
            Some(mut acc) => {
                acc.vstack_mut(&part).map_err(|e| format!("the reduced tables do not stack: {e}"))?;
                acc
            }
        });
    }
    out.ok_or_else(|| "no tables".into())
}

/// The state to fit: the given one, or the only state of the table.
///
/// # Errors
/// No state given and the table holds several (they are listed), or no `state` column.
pub fn choose_state(table: &DataFrame, state: Option<&str>) -> Result<String, String> {
    if let Some(s) = state {
        return Ok(s.to_string());
    }
    let mut states = stages::table::str_values(table, "state").map_err(|e| e.to_string())?;
    states.sort();
    states.dedup();
    match states.as_slice() {
        [one] => Ok(one.clone()),
        _ => Err(format!("the table holds states {}; choose one with --state", states.join(", "))),
    }
}

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
    let rows = loaded.fit.curve(&values, nu, &angles, data.rutherford_convention).map_err(|e| e.to_string())?;
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
    let parquet = parquet_bytes(&mut out.curve, vec![(crate::run::PROVENANCE_KEY.to_string(), provenance_json.into())])
        .map_err(|e| fail(&e))?;
    let files = [
        (dir.join("fit.yaml"), yaml.into_bytes()),
        (dir.join("fit.json"), json.into_bytes()),
        (dir.join("curve.csv"), csv),
        (dir.join("curve.parquet"), parquet),
        (dir.join(crate::run::PROVENANCE_JSON), format!("{provenance_json}\n").into_bytes()),
    ];
    write_all_atomic(&files).map_err(|e| e.diagnostic())?;
    Ok(files.into_iter().map(|(path, _)| path).collect())
}

fn opt(v: Option<f64>, prec: usize) -> String {
    v.map_or_else(|| "-".into(), |x| format!("{x:.prec$e}"))
}

/// The report for a person.
pub fn render_text(r: &FitReport) -> String {
    let mut s = format!(
        "model: {}  state: {}  points: {}  converged: {} ({}, {} iterations, {} evaluations)\n",
        r.model, r.state, r.points, r.converged, r.termination, r.iterations, r.evaluations
    );
    let _ = writeln!(
        s,
        "chi2 = {:.4}  ndf = {}  chi2/ndf = {}  p = {}",
        r.chi2,
        r.ndf,
        r.chi2_per_ndf.map_or_else(|| "-".into(), |x| format!("{x:.4}")),
        opt(r.p_value, 3)
    );
    let _ = writeln!(s, "{:<24} {:>14} {:>12} {:>12}", "parameter", "value", "error", "start");
    for p in &r.parameters {
        let _ = writeln!(
            s,
            "{:<24} {:>14.6e} {:>12} {:>12.4e}{}",
            p.name,
            p.value,
            opt(p.error, 3),
            p.start,
            if p.at_bound { "  at bound" } else { "" }
        );
    }
    if let Some(c) = &r.correlations {
        let _ = writeln!(s, "correlations:");
        for row in c {
            let _ = writeln!(s, "  {}", row.iter().map(|x| format!("{x:>7.3}")).collect::<Vec<_>>().join(" "));
        }
    }
    for m in &r.minima {
        let pars: Vec<String> = m.parameters.iter().map(|(k, v)| format!("{k} = {v:.5}")).collect();
        let _ = writeln!(s, "minimum: chi2 = {:.4} ({}) {}", m.chi2, m.termination, pars.join(", "));
    }
    for p in &r.profiles {
        let _ = writeln!(s, "profile {}: [{}, {}]", p.name, opt(p.lower, 6), opt(p.upper, 6));
    }
    for w in &r.warnings {
        let _ = writeln!(s, "warning: {w}");
    }
    s
}
