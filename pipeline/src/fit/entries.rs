//! The `fits:` section of a config: each entry planned with the config (its fit file
//! loaded and checked against the experiment, its state and name checked) and run once
//! every run is reduced, on the combined distribution (or the runs' tables when there is
//! none), into `<out>/fits/<name>/`.

use std::path::Path;

use polars::prelude::DataFrame;
use stages::{Problem, Setup};
use tracing::{info, info_span, warn};

use super::{load, run, stack, write, FitProvenance, LoadedFit};
use crate::error::{without_panics, Diagnostic, RunFailure};
use crate::layout::{is_folder_name, FITS_DIR};
use crate::provenance::RunInputs;

/// A `fits:` entry ready to run after every run.
pub struct PlannedFit {
    /// `fits[i]` key path.
    pub key: String,
    /// Output folder name under `fits/`.
    pub name: String,
    /// The state fitted.
    pub state: String,
    /// The fit file, loaded and built.
    pub loaded: LoadedFit,
}

/// A problem of a `fits:` entry: in the config, or in the fit file it names.
pub enum FitProblem {
    /// A value of the entry itself, to be located in the config.
    Config(Problem),
    /// A problem of the fit file, located in it.
    File(Diagnostic),
}

/// Load the fit file of a `fits:` entry at `key` (relative to `config_dir`) and check its
/// state against the reaction and its output name.
///
/// # Errors
/// Every problem of the entry and of its fit file.
pub fn plan_fit(
    config_dir: &Path,
    key: &str,
    f: &stages::fit::FitEntryConfig,
    setup: Option<&Setup>,
) -> Result<PlannedFit, Vec<FitProblem>> {
    let mut problems = Vec::new();
    if let Some(setup) = setup {
        let states: Vec<&str> = setup.reaction.states.iter().map(|s| s.name.as_str()).collect();
        if !states.contains(&f.state.as_str()) {
            problems.push(FitProblem::Config(Problem::new(
                format!("{key}.state"),
                &f.state,
                format!("a state of the reaction ({})", states.join(", ")),
            )));
        }
    }
    if let Some(n) = &f.name {
        if !is_folder_name(n) {
            problems.push(FitProblem::Config(Problem::new(
                format!("{key}.name"),
                n,
                "a name of letters, digits, '-', '_' and '.' (it names the output folder)",
            )));
        }
    }
    let path = config_dir.join(&f.model_file);
    let loaded = if let Some(why) = crate::config::not_a_file(&path) {
        problems.push(FitProblem::Config(Problem::new(
            format!("{key}.model_file"),
            &f.model_file,
            format!("an existing fit file ({why})"),
        )));
        None
    } else {
        load(&path, setup).map_err(|ds| problems.extend(ds.into_iter().map(FitProblem::File))).ok()
    };
    match loaded {
        Some(loaded) if problems.is_empty() => {
            let name = f.name.clone().unwrap_or_else(|| {
                let state: String =
                    f.state.chars().map(|c| if c.is_ascii_alphanumeric() || c == '-' { c } else { '_' }).collect();
                format!("{state}_{}", loaded.model)
            });
            Ok(PlannedFit { key: key.to_string(), name, state: f.state.clone(), loaded })
        }
        _ => Err(problems),
    }
}

/// The experiment whose fits run: its config file (problems of a `fits:` entry are reported
/// against it; its name and hash go into each fit's record) and folder (fit files are named
/// relative to it in the records).
pub struct Experiment<'a> {
    /// The config file.
    pub config_path: &'a Path,
    /// Its folder.
    pub config_dir: &'a Path,
    /// SHA-256 of the config file's bytes.
    pub config_sha256: &'a str,
}

/// How many fits converged, and how many failed or did not converge.
#[derive(Debug, Default, Clone, Copy, PartialEq, Eq)]
pub struct FitCounts {
    /// Fits that converged.
    pub ok: usize,
    /// Fits that failed or did not converge.
    pub failed: usize,
}

/// Run the `fits` of `experiment` on the reduced tables (made from `runs`), each into
/// `<out_dir>/fits/<name>/`; a fit that fails (or panics) is added to `failures` and the
/// others go on.
pub fn run_fits(
    fits: &[PlannedFit],
    experiment: &Experiment<'_>,
    tables: &[DataFrame],
    runs: &[RunInputs],
    out_dir: &Path,
    failures: &mut Vec<RunFailure>,
) -> FitCounts {
    let mut counts = FitCounts::default();
    for f in fits {
        let _span = info_span!("fit", fit = %f.name).entered();
        let result = without_panics(&f.loaded.path, || run_fit(experiment, f, tables, runs, out_dir)).and_then(|r| r);
        match result {
            Ok(true) => counts.ok += 1,
            Ok(false) => {
                counts.failed += 1;
                failures.push(RunFailure {
                    run: format!("fit {}", f.name),
                    problems: vec![Diagnostic::new(
                        &f.loaded.path,
                        "",
                        "the fit did not converge; fit.yaml holds its last state and the reason",
                    )],
                });
            }
            Err(d) => {
                counts.failed += 1;
                warn!("fit failed");
                failures.push(RunFailure { run: format!("fit {}", f.name), problems: vec![d] });
            }
        }
    }
    counts
}

/// Fit the stacked tables of the reduced runs; `Ok(converged)`.
fn run_fit(
    experiment: &Experiment<'_>,
    f: &PlannedFit,
    tables: &[DataFrame],
    runs: &[RunInputs],
    out_dir: &Path,
) -> Result<bool, Diagnostic> {
    if tables.is_empty() {
        return Err(Diagnostic::new(experiment.config_path, &f.key, "no run was reduced, so there is nothing to fit"));
    }
    let stacked = stack(tables.to_vec()).map_err(|e| Diagnostic::new(experiment.config_path, &f.key, e.to_string()))?;
    let mut output = run(&f.loaded, &stacked, &f.state)
        .map_err(|e| Diagnostic::new(&f.loaded.path, "", format!("fit of state {}: {e}", f.state)))?;
    // The fit file relative to the config's folder, like the inputs, so that the record
    // does not depend on where xsflow was started.
    let path = &f.loaded.path;
    let fit_file = path.strip_prefix(experiment.config_dir).unwrap_or(path).to_string_lossy().replace('\\', "/");
    let inputs = runs.iter().flat_map(|r| r.inputs.iter().cloned()).collect();
    let json = FitProvenance::new(&f.loaded, fit_file, Some(experiment), inputs).to_json(&f.loaded)?;
    let dir = out_dir.join(FITS_DIR).join(&f.name);
    write(&dir, &mut output, &json)?;
    let r = &output.report;
    if r.converged {
        info!(chi2_per_ndf = r.chi2_per_ndf.unwrap_or(f64::NAN), dir = %dir.display(), "fit done");
    } else {
        warn!(termination = %r.termination, "fit did not converge");
    }
    Ok(r.converged)
}
