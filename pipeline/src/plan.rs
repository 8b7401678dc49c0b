//! From a parsed config to a plan: paths resolved relative to the config file, the set-up
//! checked, every stage built, the columns each stage needs traced through the stage list,
//! and the runs discovered. All config problems are collected before any run file is
//! read; `xsflow check` adds the runs' own problems (`run::check_runs`) and stops there.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use stages::yields::{ADDED_COLUMNS, OPTIONAL_COLUMNS, REQUIRED_COLUMNS};
use stages::{Problem, RunRecord, Setup, Stage};

use crate::config::{parse_experiment, ExperimentInfo, YamlFile};
use crate::error::Diagnostic;
use crate::fit::{plan_fit, Experiment, FitProblem, PlannedFit};
use crate::layout::is_folder_name;
use crate::provenance::{change_since, sha256_file_stamped, sha256_hex, FileStamp};

/// A stage ready to run, with where it came from in the config.
pub struct PlannedStage {
    /// `stages[i]` key path.
    pub key: String,
    /// The built stage.
    pub stage: Box<dyn Stage>,
}

/// A run record that parsed and passed its checks.
#[derive(Debug, Clone)]
pub struct LoadedRun {
    /// The record file.
    pub record_path: PathBuf,
    /// Its bytes (hashed for provenance).
    pub record_bytes: Vec<u8>,
    /// The record.
    pub record: RunRecord,
    /// The data file (yields, events or spectra), resolved relative to the record.
    pub yields_path: PathBuf,
    /// What the data file holds.
    pub data: stages::setup::RunData,
    /// This run's set-up when its arms stand away from the config's angles (else the
    /// plan's).
    pub setup: Option<Setup>,
    /// This run's raw-data plan when its arms moved (automatic windows follow the
    /// kinematics at the new angles; else the plan's).
    pub raw: Option<stages::raw::RawPlan>,
    /// SHA-256 of the data file and the stamp of the version hashed, computed once (a
    /// batch's change check and the run's provenance use the same one; event files can be
    /// large).
    pub data_sha256: std::sync::OnceLock<(String, FileStamp)>,
}

impl LoadedRun {
    /// The set-up this run is reduced with: its own when arms moved, else the plan's.
    pub fn setup<'a>(&'a self, plan: &'a Plan) -> &'a Setup {
        self.setup.as_ref().unwrap_or(&plan.setup)
    }

    /// The raw-data plan of this run: its own when arms moved, else the plan's.
    pub fn raw<'a>(&'a self, plan: &'a Plan) -> Option<&'a stages::raw::RawPlan> {
        self.raw.as_ref().or(plan.raw.as_ref())
    }

    /// SHA-256 of the data file, read the first time it is asked for.
    ///
    /// # Errors
    /// The file cannot be read, or changed while it was read.
    pub fn data_hash(&self) -> std::io::Result<String> {
        if let Some((h, _)) = self.data_sha256.get() {
            return Ok(h.clone());
        }
        let hashed = sha256_file_stamped(&self.yields_path)?;
        Ok(self.data_sha256.get_or_init(|| hashed).0.clone())
    }

    /// Whether the record and the data file are still the versions this run was planned
    /// and hashed from, so that its outputs match the hashes recorded with them.
    ///
    /// # Errors
    /// The file (named) that disappeared or changed, and how.
    pub fn check_unchanged(&self) -> Result<(), Diagnostic> {
        let changed = |path: &Path, how: String| {
            Diagnostic::new(path, "", format!("the file changed after the run's inputs were read and hashed ({how})"))
                .with_help(
                    "nothing of this run was written; once the file is complete, run again: the run is picked up",
                )
        };
        let gone = |path: &Path, e: std::io::Error| {
            let what = if e.kind() == std::io::ErrorKind::NotFound { "disappeared" } else { "could no longer be read" };
            Diagnostic::new(path, "", format!("the file {what} after the run's inputs were read and hashed ({e})"))
                .with_help("nothing of this run was written; the run is picked up again when the file is back")
        };
        match std::fs::read(&self.record_path) {
            Err(e) => return Err(gone(&self.record_path, e)),
            Ok(bytes) if bytes != self.record_bytes => {
                let how = match (self.record_bytes.len(), bytes.len()) {
                    (a, b) if a == b => "same size, different content".to_string(),
                    (a, b) => format!("size {a} -> {b} bytes"),
                };
                return Err(changed(&self.record_path, how));
            }
            Ok(_) => {}
        }
        let Some((sha, stamp)) = self.data_sha256.get() else { return Ok(()) };
        match change_since(&self.yields_path, sha, stamp) {
            Err(e) => Err(gone(&self.yields_path, e)),
            Ok(Some(how)) => Err(changed(&self.yields_path, how)),
            Ok(None) => Ok(()),
        }
    }
}

/// A discovered run: loaded, or the problems that stop it.
pub struct PlannedRun {
    /// The record file.
    pub record_path: PathBuf,
    /// The loaded record or its problems.
    pub loaded: Result<LoadedRun, Vec<Diagnostic>>,
}

impl PlannedRun {
    /// The run id if the record loaded, else the record's file name.
    pub fn label(&self) -> String {
        match &self.loaded {
            Ok(run) => run.record.run.0.clone(),
            Err(_) => self
                .record_path
                .file_name()
                .map_or_else(|| self.record_path.display().to_string(), |n| n.to_string_lossy().into_owned()),
        }
    }
}

/// Everything needed to reduce the runs of one config.
pub struct Plan {
    /// The config file.
    pub config_path: PathBuf,
    /// Folder of the config file; relative paths start here.
    pub config_dir: PathBuf,
    /// SHA-256 of the config file bytes.
    pub config_sha256: String,
    /// Name and description.
    pub experiment: ExperimentInfo,
    /// Reaction, target, detectors.
    pub setup: Setup,
    /// Per-run stages in order.
    pub stages: Vec<PlannedStage>,
    /// Fits run once every run is reduced.
    pub fits: Vec<PlannedFit>,
    /// The checked `raw:` section, for runs with events or spectra.
    pub raw: Option<stages::raw::RawPlan>,
    /// How runs are combined.
    pub combine: stages::combine::CombineConfig,
    /// What is drawn beside the tables.
    pub report: crate::config::ReportConfig,
    /// Runs in record-path order.
    pub runs: Vec<PlannedRun>,
}

/// Read, parse and check a config, build its stages and discover its runs.
///
/// # Errors
/// Every config-level problem at once (the runs' own problems are kept per run).
pub fn plan(config_path: &Path) -> Result<Plan, Vec<Diagnostic>> {
    plan_with(config_path, false)
}

/// As [`plan`]; with `empty_patterns_warn`, a glob pattern that matches no record is a
/// warning, not an error (a nightly batch may find a run folder still empty).
///
/// # Errors
/// As [`plan`].
pub fn plan_with(config_path: &Path, empty_patterns_warn: bool) -> Result<Plan, Vec<Diagnostic>> {
    let file = YamlFile::read(config_path).map_err(|d| vec![d])?;
    let (config, mut diags) = parse_experiment(&file);
    let config_dir = config_path.parent().map_or_else(|| PathBuf::from("."), Path::to_path_buf);
    let locate = |problems: Vec<Problem>| problems.iter().map(|p| file.problem(p)).collect::<Vec<_>>();

    // Each section's own ranges are checked even when another section failed to parse.
    let setup = match (config.reaction.clone(), config.target.clone(), config.detectors.clone()) {
        (Some(reaction), Some(target), Some(detectors)) => {
            let (mut setup, problems) = Setup::new(reaction, target, detectors);
            diags.extend(locate(problems));
            diags.extend(locate(setup.attach_arms(config.arms.clone().unwrap_or_default())));
            Some(setup)
        }
        (reaction, target, detectors) => {
            diags.extend(locate(
                reaction.map(|r| r.validate()).unwrap_or_default().into_iter().map(|p| p.under("reaction")).collect(),
            ));
            diags.extend(locate(
                target.map(|t| t.validate()).unwrap_or_default().into_iter().map(|p| p.under("target")).collect(),
            ));
            for (i, d) in detectors.unwrap_or_default().iter().enumerate() {
                diags.extend(locate(d.validate().into_iter().map(|p| p.under(&format!("detectors[{i}]"))).collect()));
            }
            None
        }
    };
    let raw = match (&config.raw, &setup) {
        (Some(r), Some(setup)) => match r.build(setup) {
            Ok(plan) => Some(plan),
            Err(problems) => {
                diags.extend(locate(problems.into_iter().map(|p| p.under("raw")).collect()));
                None
            }
        },
        _ => None,
    };
    let mut stages = Vec::new();
    let mut fits = Vec::new();
    for (i, f) in config.fits.iter().flatten().enumerate() {
        match plan_fit(&config_dir, &format!("fits[{i}]"), f, setup.as_ref()) {
            Ok(pf) => fits.push(pf),
            Err(problems) => diags.extend(problems.into_iter().map(|p| match p {
                FitProblem::Config(p) => file.problem(&p),
                FitProblem::File(d) => d,
            })),
        }
    }
    if let Some(configs) = &config.stages {
        for (i, sc) in configs.iter().enumerate() {
            let key = format!("stages[{i}]");
            match sc.build(setup.as_ref()) {
                Ok(stage) => stages.push(PlannedStage { key, stage }),
                Err(problems) => diags.extend(
                    locate(problems.into_iter().map(|p| p.under(&key)).collect()).into_iter().map(|mut d| {
                        d.message = format!("({}) {}", sc.type_name(), d.message);
                        d
                    }),
                ),
            }
        }
        if stages.len() == configs.len() {
            diags.extend(locate(trace_columns(&stages)));
            if let Some(f) = fits.first() {
                let available: Vec<&str> = stages.iter().flat_map(|s| s.stage.adds()).chain(REQUIRED_COLUMNS).collect();
                for need in stages::fit::FIT_COLUMNS.iter().filter(|n| !available.contains(n)) {
                    diags.push(file.problem(&Problem::new(
                        f.key.clone(),
                        "a fit",
                        format!(
                            "column `{need}` added by a stage (a fit needs the CM cross sections: transform_to_cm)"
                        ),
                    )));
                }
            }
        }
        if configs.is_empty() {
            diags.push(file.problem(&Problem::new("stages", "an empty list", "at least one stage")));
        }
    }
    if let Some(combine) = &config.combine {
        diags.extend(locate(combine.validate()));
    }
    if let (Some(report), Some(setup)) = (&config.report, &setup) {
        let ids: Vec<&str> = setup.detectors.iter().map(|d| d.id.0.as_str()).collect();
        diags.extend(locate(report.validate(&ids)));
    }
    let record_paths = config
        .runs
        .as_deref()
        .map(|patterns| discover_runs(&file, &config_dir, patterns, empty_patterns_warn, &mut diags))
        .unwrap_or_default();
    match (setup, config.experiment) {
        (Some(setup), Some(experiment)) if diags.is_empty() => {
            let runs = record_paths
                .into_iter()
                .map(|record_path| PlannedRun {
                    loaded: load_run(&record_path, &stages, &setup, config.raw.as_ref().filter(|_| raw.is_some())),
                    record_path,
                })
                .collect();
            let plan = Plan {
                config_sha256: sha256_hex(&file.bytes),
                config_path: config_path.to_path_buf(),
                config_dir,
                experiment,
                setup,
                stages,
                fits,
                raw,
                combine: config.combine.clone().unwrap_or_default(),
                report: config.report.clone().unwrap_or_default(),
                runs,
            };
            plan.check_unique_runs().map(|()| plan)
        }
        _ => {
            diags.sort_by_key(|d| (d.line.unwrap_or(usize::MAX), d.column.unwrap_or(0)));
            Err(diags)
        }
    }
}

/// Walk the stage list with the set of columns available so far; a stage that needs a
/// column no earlier stage adds is a problem. Optional yields columns are checked per run.
fn trace_columns(stages: &[PlannedStage]) -> Vec<Problem> {
    let mut available: Vec<&str> = ADDED_COLUMNS.iter().chain(&REQUIRED_COLUMNS).copied().collect();
    let mut problems = Vec::new();
    for (i, s) in stages.iter().enumerate() {
        for need in s.stage.needs() {
            if !available.contains(&need) && !OPTIONAL_COLUMNS.contains(&need) {
                let later = stages[i + 1..].iter().find(|l| l.stage.adds().contains(&need)).map(|l| l.stage.name());
                let expected = match later {
                    Some(name) => {
                        format!("column `{need}` added by an earlier stage: move `{name}` before `{}`", s.stage.name())
                    }
                    None => format!("column `{need}` added by an earlier stage (available: {})", available.join(", ")),
                };
                problems.push(Problem::new(format!("{}.type", s.key), s.stage.name(), &expected));
            }
        }
        available.extend(s.stage.adds());
    }
    problems
}

/// Expand the `runs:` patterns into record files, sorted, each at most once.
fn discover_runs(
    file: &YamlFile,
    config_dir: &Path,
    patterns: &[String],
    empty_warn: bool,
    diags: &mut Vec<Diagnostic>,
) -> Vec<PathBuf> {
    let mut found = std::collections::BTreeSet::new();
    if patterns.is_empty() {
        diags.push(file.problem(&Problem::new(
            "runs",
            "an empty list",
            "at least one run record path or glob pattern",
        )));
    }
    for (i, pattern) in patterns.iter().enumerate() {
        let key = format!("runs[{i}]");
        let full = config_dir.join(pattern);
        let text = full.to_string_lossy().into_owned();
        if pattern.contains(['*', '?', '[']) {
            match glob::glob(&text) {
                Ok(paths) => {
                    let before = found.len();
                    found.extend(paths.filter_map(Result::ok).filter(|p| p.is_file()));
                    if found.len() == before && empty_warn {
                        tracing::warn!(pattern = %pattern, "runs[{i}] matches no run record (looked for {text})");
                    } else if found.len() == before {
                        diags.push(file.problem(&Problem::new(
                            key,
                            pattern,
                            format!("a pattern that matches at least one run record (looked for {text})"),
                        )));
                    }
                }
                Err(e) => diags.push(file.problem(&Problem::new(key, pattern, format!("a valid glob pattern ({e})")))),
            }
        } else if let Some(why) = crate::config::not_a_file(&full) {
            let why = if full.exists() { why } else { format!("not found: {text}") };
            diags.push(file.problem(&Problem::new(key, pattern, format!("an existing run record file ({why})"))));
        } else {
            found.insert(full);
        }
    }
    found.into_iter().collect()
}

/// Read and check one run record against the stages.
fn load_run(
    record_path: &Path,
    stages: &[PlannedStage],
    setup: &Setup,
    raw: Option<&stages::raw::RawConfig>,
) -> Result<LoadedRun, Vec<Diagnostic>> {
    let has_raw = raw.is_some();
    let file = YamlFile::read(record_path).map_err(|d| vec![d])?;
    let record: RunRecord = file.parse("", &file.value).map_err(|d| vec![d])?;
    let mut problems = record.validate();
    // Detectors on arms turned away from the config's angles: this run's own set-up, and
    // its own gates where they follow the kinematics.
    let (run_setup, run_raw) = match setup.for_run(&record) {
        Err(p) => {
            problems.extend(p);
            (None, None)
        }
        Ok(None) => (None, None),
        Ok(Some(turned)) => {
            let turned_raw =
                match raw.map(|r| r.build(&turned)) {
                    Some(Err(p)) => {
                        problems.extend(p.into_iter().map(|p| {
                            Problem::new("arm_theta_lab_deg", format!("raw.{} {}", p.key, p.found), p.expected)
                        }));
                        None
                    }
                    Some(Ok(plan)) => Some(plan),
                    None => None,
                };
            (Some(turned), turned_raw)
        }
    };
    if !is_folder_name(&record.run.0) {
        problems.push(Problem::new(
            "run",
            &record.run,
            "an id of letters, digits, '-', '_' and '.' (it names the output folder)",
        ));
    }
    for s in stages {
        problems.extend(s.stage.check_run(&record));
    }
    let (data, name) = record.data_file().unwrap_or((stages::setup::RunData::Yields, ""));
    let key = match data {
        stages::setup::RunData::Yields => "yields_file",
        stages::setup::RunData::Events => "events_file",
        stages::setup::RunData::Spectra => "spectra_file",
    };
    let yields_path = record_path.parent().unwrap_or(Path::new(".")).join(name);
    if let Some(why) = crate::config::not_a_file(&yields_path).filter(|_| problems.is_empty()) {
        let what = if data == stages::setup::RunData::Yields { "yields table" } else { "data file" };
        problems.push(Problem::new(key, name, format!("an existing {what} ({why})")));
    }
    if problems.is_empty() && data != stages::setup::RunData::Yields && !has_raw {
        problems.push(Problem::new(
            key,
            name,
            "a config with a `raw:` section (it says how events and spectra become yields)",
        ));
    }
    if !problems.is_empty() {
        return Err(problems.iter().map(|p| file.problem(p)).collect());
    }
    Ok(LoadedRun {
        record_path: record_path.to_path_buf(),
        record_bytes: file.bytes,
        record,
        yields_path,
        data,
        setup: run_setup,
        raw: run_raw,
        data_sha256: std::sync::OnceLock::new(),
    })
}

impl Plan {
    /// The experiment, as its fits see it.
    pub fn experiment(&self) -> Experiment<'_> {
        Experiment { config_path: &self.config_path, config_dir: &self.config_dir, config_sha256: &self.config_sha256 }
    }

    /// Two record files with the same run id would write to the same output folder.
    fn check_unique_runs(&self) -> Result<(), Vec<Diagnostic>> {
        let mut first: BTreeMap<&str, &Path> = BTreeMap::new();
        let mut diags = Vec::new();
        for run in &self.runs {
            if let Ok(l) = &run.loaded {
                if let Some(prev) = first.insert(&l.record.run.0, &l.record_path) {
                    diags.push(Diagnostic::new(
                        &l.record_path,
                        "run",
                        format!(
                            "found run id {}, expected an id not used by another record ({} has it)",
                            l.record.run,
                            prev.display()
                        ),
                    ));
                }
            }
        }
        if diags.is_empty() {
            Ok(())
        } else {
            Err(diags)
        }
    }

    /// Keep only the named runs.
    ///
    /// # Errors
    /// A run id that no record has (the known ids are listed).
    pub fn select_runs(&mut self, ids: &[String]) -> Result<(), Diagnostic> {
        if ids.is_empty() {
            return Ok(());
        }
        let labels: Vec<String> = self.runs.iter().map(PlannedRun::label).collect();
        if let Some(bad) = ids.iter().find(|id| !labels.contains(id)) {
            return Err(Diagnostic::new(
                &self.config_path,
                "runs",
                format!("--run {bad}: no such run; runs found: {}", labels.join(", ")),
            ));
        }
        self.runs.retain(|r| ids.contains(&r.label()));
        Ok(())
    }
}
