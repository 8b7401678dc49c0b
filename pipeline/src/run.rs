//! Reducing runs: read the yields table, check it, apply the stages, write the outputs. One
//! run's failure is reported and the others go on.

use std::path::{Path, PathBuf};
use std::time::Instant;

use polars::prelude::{Column, DataFrame, PolarsResult};
use stages::setup::RunData;
use stages::{Origin, RunContext, StageError};
use tracing::{debug, info, info_span, warn};

use crate::catalogue::{RunEntry, RunStatus};
use crate::error::{without_panics, Diagnostic, RunFailure};
use crate::fit::{run_fits, FitCounts};
use crate::layout::{
    ANGULAR_DISTRIBUTION_CSV, ANGULAR_DISTRIBUTION_PARQUET, ANGULAR_DISTRIBUTION_PROVENANCE_JSON, COVARIANCE_CSV,
    CROSS_SECTIONS_CSV, CROSS_SECTIONS_PARQUET, PROVENANCE_JSON, PROVENANCE_KEY,
};
use crate::plan::{LoadedRun, Plan, PlannedRun};
use crate::provenance::{record_time_s, rfc3339_utc, CombinedProvenance, MadeWith, Provenance, RunInputs};
use crate::tables::{csv_bytes, is_csv, parquet_bytes, read_table, write_all_atomic};

/// The reduced table of one run and how it was made.
pub struct Reduced {
    /// The final table.
    pub table: DataFrame,
    /// Its provenance.
    pub provenance: Provenance,
    /// For runs with events or spectra: the tallies, spectra and gates.
    pub raw: Option<RawOutputs>,
}

/// What a run's raw data gave besides its yields.
pub struct RawOutputs {
    /// Yields, tallies, spectra, peak fits.
    pub result: stages::raw::RawResult,
    /// The gates used.
    pub gates: Vec<stages::raw::Gate>,
    /// Detector ids by index.
    pub detectors: Vec<String>,
    /// The calibrations, to give each spectrum channel its energy.
    pub energies_mev: Vec<Vec<f64>>,
    /// The PID polygons by detector id: vertices (E in MeV, ΔE).
    pub pid_polygons: std::collections::BTreeMap<String, Vec<[f64; 2]>>,
}

/// The derived yields table of a run with events or spectra.
fn yields_frame(rows: &[stages::raw::YieldRow]) -> PolarsResult<DataFrame> {
    DataFrame::new_infer_height(vec![
        Column::new("detector".into(), rows.iter().map(|r| r.detector.clone()).collect::<Vec<_>>()),
        Column::new("state".into(), rows.iter().map(|r| r.state.clone()).collect::<Vec<_>>()),
        Column::new("branch".into(), rows.iter().map(|r| i32::from(r.branch)).collect::<Vec<_>>()),
        Column::new("counts_gross".into(), rows.iter().map(|r| r.counts_gross).collect::<Vec<_>>()),
        Column::new("counts_background".into(), rows.iter().map(|r| r.counts_background).collect::<Vec<_>>()),
        Column::new("counts_background_err".into(), rows.iter().map(|r| r.counts_background_err).collect::<Vec<_>>()),
        Column::new("window_acceptance".into(), rows.iter().map(|r| r.window_acceptance).collect::<Vec<_>>()),
        Column::new("window_acceptance_err".into(), rows.iter().map(|r| r.window_acceptance_err).collect::<Vec<_>>()),
    ])
}

/// Read a run's events or spectra through the `raw:` section.
fn reduce_raw(plan: &Plan, run: &LoadedRun) -> Result<(DataFrame, RawOutputs), Vec<Diagnostic>> {
    let path = &run.yields_path;
    let raw = run.raw(plan).ok_or_else(|| {
        vec![Diagnostic::new(&run.record_path, "", "events or spectra need a `raw:` section in the config")]
    })?;
    let result = match run.data {
        RunData::Spectra => crate::events::reduce_spectra(path, raw),
        _ => crate::events::reduce_events(path, raw),
    }
    .map_err(|e| vec![Diagnostic::new(path, "", e.to_string())])?;
    let t = &result.tally;
    if t.events == 0 {
        warn!(run = %run.record.run, file = %path.display(), "the file holds no events: every yield is zero");
    } else if t.unknown_detector + t.invalid_value == t.events {
        // Not one usable event: the file is not what the `raw:` section describes.
        return Err(vec![Diagnostic::new(
            path,
            "",
            format!(
                "none of its {} events is usable: {} with an unknown detector, {} with an invalid value",
                t.events, t.unknown_detector, t.invalid_value
            ),
        )
        .with_help("check raw.columns, raw.detector_ids and raw.overflow_channel against the file")]);
    }
    for w in &result.warnings {
        warn!("{w}");
    }
    if !result.tally.reconciles() {
        return Err(vec![Diagnostic::new(
            path,
            "",
            format!("internal error: the tallies do not add up: {:?}", result.tally),
        )]);
    }
    let table = yields_frame(&result.yields).map_err(|e| vec![Diagnostic::new(path, "", e.to_string())])?;
    let detectors: Vec<String> = raw.detector_ids().iter().map(|s| s.to_string()).collect();
    let energies_mev = (0..detectors.len()).map(|d| raw.channel_energies_mev(d)).collect();
    let pid_polygons = raw.config.pid.clone();
    Ok((table, RawOutputs { result, gates: raw.gates(), detectors, energies_mev, pid_polygons }))
}

/// Read and check one run's yields table, then apply every stage; then check that the
/// record and the data file are still the versions that were read and hashed.
///
/// # Errors
/// A record or data file that changed or disappeared meanwhile; otherwise every problem of
/// the yields table, or the first stage that fails; located.
pub fn reduce_run(plan: &Plan, run: &LoadedRun) -> Result<Reduced, Vec<Diagnostic>> {
    let result = without_panics(&run.record_path, || read_and_reduce(plan, run)).map_err(|d| vec![d]).and_then(|r| r);
    // A file that changed since it was hashed explains any failure, and would make a
    // success disagree with the hashes recorded in its provenance and the catalogue.
    run.check_unchanged().map_err(|d| vec![d])?;
    result
}

/// Environment variable that makes the run of that name panic, in debug builds only: the
/// tests use it to show that a panic fails one run and the others go on.
pub const PANIC_RUN_ENV: &str = "XSFLOW_TEST_PANIC_RUN";

fn read_and_reduce(plan: &Plan, run: &LoadedRun) -> Result<Reduced, Vec<Diagnostic>> {
    if cfg!(debug_assertions) && std::env::var(PANIC_RUN_ENV).is_ok_and(|r| r == run.record.run.0) {
        panic!("{PANIC_RUN_ENV} asked run {} to panic", run.record.run.0);
    }
    let yields = &run.yields_path;
    let sha = run.data_hash().map_err(|e| {
        let what = match e.kind() {
            std::io::ErrorKind::NotFound => "the run's data file disappeared after the runs were found",
            _ => "cannot read the run's data file",
        };
        vec![Diagnostic::new(yields, "", format!("{what}: {e}"))]
    })?;
    let (raw, raw_outputs) = if run.data == RunData::Yields {
        let help = "a yields table needs columns detector, state, counts_gross (schemas/yields.schema.json)";
        let t = read_table(yields).map_err(|e| vec![Diagnostic::new(yields, "", e.to_string()).with_help(help)])?;
        if t.height() == 0 {
            // Every column of a header-only CSV reads as text: say what is wrong instead.
            let message = "found no data rows under the header, expected one row per detector and state";
            return Err(vec![Diagnostic::new(yields, "", message).with_help(help)]);
        }
        (t, None)
    } else {
        let (t, o) = reduce_raw(plan, run)?;
        (t, Some(o))
    };
    if raw.height() == 0 {
        warn!(run = %run.record.run, file = %yields.display(), "yields table has no rows");
    }
    let setup = run.setup(plan);
    let prepared = stages::yields::prepare(&raw, setup, &run.record.run.0)
        .map_err(|errs| errs.iter().map(|e| table_diagnostic(yields, "", e)).collect::<Vec<_>>())?;
    for c in &prepared.ignored_columns {
        warn!(run = %run.record.run, column = %c, "yields column is not part of the yields table and is ignored");
    }
    let table = run_stages(plan, run, prepared.table)?;
    let base = &plan.config_dir;
    let provenance = Provenance {
        made_with: MadeWith::new(&plan.config_path, plan.config_sha256.clone()),
        run: run.record.run.0.clone(),
        stages: stage_names(plan),
        inputs: vec![
            Provenance::input(base, &run.record_path, &run.record_bytes),
            Provenance::input_hashed(base, yields, sha),
        ],
        created_utc: rfc3339_utc(record_time_s()),
    };
    Ok(Reduced { table, provenance, raw: raw_outputs })
}

/// The names of the stages applied to every run, in order.
fn stage_names(plan: &Plan) -> Vec<String> {
    plan.stages.iter().map(|s| s.stage.name().to_string()).collect()
}

/// A stage or table error as a diagnostic; a data row of a CSV file gets its line number.
fn table_diagnostic(file: &Path, key: &str, e: &StageError) -> Diagnostic {
    let line = match e {
        StageError::BadValue { row, .. } | StageError::UnknownDetector { row, .. } if is_csv(file) && *row > 0 => {
            Some((row + 1, 1))
        }
        _ => None,
    };
    Diagnostic::new(file, key, e.to_string()).at(line)
}

/// Write one run's tables and provenance into `<out>/<run>/`, all together (see
/// [`write_all_atomic`]).
///
/// # Errors
/// A diagnostic naming the file that could not be encoded or written.
pub fn write_outputs(out_dir: &Path, reduced: &mut Reduced) -> Result<Vec<PathBuf>, Diagnostic> {
    let files = output_files(out_dir, reduced)?;
    write_all_atomic(&files).map_err(|e| e.diagnostic())?;
    Ok(files.into_iter().map(|(path, _)| path).collect())
}

/// One run's output files, encoded: its tables and provenance in `<out>/<run>/`.
///
/// # Errors
/// A table the writer rejects.
pub fn output_files(out_dir: &Path, reduced: &mut Reduced) -> Result<Vec<(PathBuf, Vec<u8>)>, Diagnostic> {
    let dir = out_dir.join(&reduced.provenance.run);
    let fail = |e: &dyn std::fmt::Display| Diagnostic::new(&dir, "", format!("cannot encode the output: {e}"));
    let record = serde_json::to_string_pretty(&reduced.provenance).map_err(|e| fail(&e))?;
    let parquet =
        parquet_bytes(&mut reduced.table, vec![(PROVENANCE_KEY.to_string(), record.clone())]).map_err(|e| fail(&e))?;
    let csv = csv_bytes(&mut reduced.table).map_err(|e| fail(&e))?;
    let mut files = vec![
        (CROSS_SECTIONS_PARQUET, parquet),
        (CROSS_SECTIONS_CSV, csv),
        (PROVENANCE_JSON, format!("{record}\n").into_bytes()),
    ];
    if let Some(raw) = &reduced.raw {
        files.extend(raw_files(raw, &record).map_err(|e| fail(&e))?);
    }
    Ok(files.into_iter().map(|(name, bytes)| (dir.join(name), bytes)).collect())
}

/// The derived yields (`yields.csv`), the tallies, gates and peak fits (`raw.json`), the
/// spectra (`spectra.parquet`, with the gates in its metadata) and, with PID polygons, the
/// binned (E, ΔE) histogram (`pid.parquet`).
fn raw_files(raw: &RawOutputs, provenance: &str) -> PolarsResult<Vec<(&'static str, Vec<u8>)>> {
    let r = &raw.result;
    let mut yields = yields_frame(&r.yields)?;
    let json = serde_json::json!({
        "tally": r.tally,
        "reconciled": r.tally.reconciles(),
        "gates": raw.gates,
        "peak_fits": r.peak_fits,
        "warnings": r.warnings,
    });
    let gates = serde_json::to_string(&raw.gates).unwrap_or_default();
    let meta = |extra: (&str, String)| {
        vec![(PROVENANCE_KEY.to_string(), provenance.to_string()), (extra.0.to_string(), extra.1)]
    };
    let mut spectra = DataFrame::new_infer_height(vec![
        Column::new("detector".into(), r.spectra.iter().map(|s| raw.detectors[s.0].clone()).collect::<Vec<_>>()),
        Column::new("channel".into(), r.spectra.iter().map(|s| s.1 as u32).collect::<Vec<_>>()),
        Column::new("energy_mev".into(), r.spectra.iter().map(|s| raw.energies_mev[s.0][s.1]).collect::<Vec<_>>()),
        Column::new("counts".into(), r.spectra.iter().map(|s| s.2).collect::<Vec<_>>()),
    ])?;
    let mut files = vec![
        ("yields.csv", csv_bytes(&mut yields)?),
        (
            crate::layout::RAW_JSON,
            format!("{}\n", serde_json::to_string_pretty(&json).unwrap_or_default()).into_bytes(),
        ),
        (crate::layout::SPECTRA_PARQUET, parquet_bytes(&mut spectra, meta(("xsflow.gates", gates)))?),
    ];
    if !r.pid.is_empty() {
        files.push((crate::layout::PID_PARQUET, pid_bytes(raw, provenance)?));
    }
    Ok(files)
}

/// The binned (E, ΔE) histogram of the detectors with a PID polygon: each occupied bin
/// with its edges (ΔE in its own units; E in MeV, the calibrated energy of the bin's first
/// channel and of the next bin's, or of the last channel for the top bin), and the
/// polygons in the metadata (`xsflow.pid_polygons`), so that a plot needs no config.
fn pid_bytes(raw: &RawOutputs, provenance: &str) -> PolarsResult<Vec<u8>> {
    let pid = &raw.result.pid;
    let bins = stages::raw::PID_BINS;
    // Bin b of an axis of n channels covers [b·n/bins, (b+1)·n/bins).
    let edge = |d: usize, b: usize| (b * raw.energies_mev[d].len()) as f64 / bins as f64;
    let energy_at = |d: usize, b: usize| {
        let e = &raw.energies_mev[d];
        let c = ((b * e.len()) / bins).min(e.len().saturating_sub(1));
        e.get(c).copied().unwrap_or(f64::NAN)
    };
    let mut frame = DataFrame::new_infer_height(vec![
        Column::new("detector".into(), pid.iter().map(|p| raw.detectors[p.0].clone()).collect::<Vec<_>>()),
        Column::new("energy_bin".into(), pid.iter().map(|p| p.1 as u32).collect::<Vec<_>>()),
        Column::new("delta_e_bin".into(), pid.iter().map(|p| p.2 as u32).collect::<Vec<_>>()),
        Column::new("energy_low_mev".into(), pid.iter().map(|p| energy_at(p.0, p.1)).collect::<Vec<_>>()),
        Column::new("energy_high_mev".into(), pid.iter().map(|p| energy_at(p.0, p.1 + 1)).collect::<Vec<_>>()),
        Column::new("delta_e_low".into(), pid.iter().map(|p| edge(p.0, p.2)).collect::<Vec<_>>()),
        Column::new("delta_e_high".into(), pid.iter().map(|p| edge(p.0, p.2 + 1)).collect::<Vec<_>>()),
        Column::new("counts".into(), pid.iter().map(|p| p.3).collect::<Vec<_>>()),
    ])?;
    let binning =
        format!("{{\"bins_per_axis\": {bins}, \"axes\": \"ADC channel and ΔE value over [0, overflow_channel)\"}}");
    let polygons = serde_json::to_string(&raw.pid_polygons).unwrap_or_default();
    let meta = vec![
        (PROVENANCE_KEY.to_string(), provenance.to_string()),
        ("xsflow.pid_bins".to_string(), binning),
        (PID_POLYGONS_KEY.to_string(), polygons),
    ];
    parquet_bytes(&mut frame, meta)
}

/// The metadata key of the PID polygons in pid.parquet.
pub const PID_POLYGONS_KEY: &str = "xsflow.pid_polygons";

/// The catalogue entry of a processed run (`hash` and `config_sha` empty for `reduce`,
/// which keeps no catalogue), started at `start`.
pub fn run_entry(
    run: &PlannedRun,
    hash: &str,
    config_sha: &str,
    start: Instant,
    result: &Result<Reduced, Vec<Diagnostic>>,
) -> RunEntry {
    let loaded = run.loaded.as_ref().ok();
    let mut entry = RunEntry {
        run: run.label(),
        record_file: run.record_path.to_string_lossy().into_owned(),
        data_file: loaded.map(|l| l.yields_path.to_string_lossy().into_owned()).unwrap_or_default(),
        input_sha256: hash.to_string(),
        config_sha256: config_sha.to_string(),
        status: RunStatus::Ok,
        error: String::new(),
        processed_utc: rfc3339_utc(record_time_s()),
        seconds: start.elapsed().as_secs_f64(),
        events: None,
        charge_c: loaded.and_then(|l| l.record.charge_c()),
        live_fraction: None,
        warnings: String::new(),
    };
    match result {
        Ok(reduced) => {
            entry.events = reduced.raw.as_ref().map(|r| r.result.tally.events as i64);
            entry.warnings = reduced.raw.as_ref().map(|r| r.result.warnings.join("\n")).unwrap_or_default();
            entry.live_fraction = stages::table::f64_values(&reduced.table, "live_fraction")
                .ok()
                .filter(|v| !v.is_empty())
                .map(|v| v.iter().sum::<f64>() / v.len() as f64);
        }
        Err(problems) => {
            entry.status = RunStatus::Failed;
            entry.error = problems.iter().map(ToString::to_string).collect::<Vec<_>>().join("\n");
        }
    }
    entry
}

/// Counts of a reduction.
#[derive(Debug, Default, Clone, Copy, PartialEq, Eq)]
pub struct Summary {
    /// Runs reduced and written.
    pub ok: usize,
    /// Runs that failed.
    pub failed: usize,
    /// Fits that converged.
    pub fits_ok: usize,
    /// Fits that failed or did not converge.
    pub fits_failed: usize,
}

/// Reduce every run of the plan into `out_dir`, combine, fit, and write the report;
/// failures are returned, not fatal.
pub fn reduce_all(plan: &Plan, out_dir: &Path) -> (Summary, Vec<RunFailure>) {
    let mut summary = Summary::default();
    let mut failures = Vec::new();
    let mut tables = Vec::new();
    let mut entries = Vec::new();
    for planned in &plan.runs {
        let label = planned.label();
        let _span = info_span!("run", run = %label).entered();
        let start = Instant::now();
        let result = planned.loaded.as_ref().map_err(Clone::clone).and_then(|run| {
            let mut reduced = reduce_run(plan, run)?;
            let files = write_outputs(out_dir, &mut reduced).map_err(|d| vec![d])?;
            info!(files = files.len(), dir = %out_dir.join(&label).display(), "run reduced");
            Ok(reduced)
        });
        entries.push(run_entry(planned, "", "", start, &result));
        match result {
            Ok(reduced) => {
                summary.ok += 1;
                tables.push((reduced.table, reduced.provenance.run_inputs()));
            }
            Err(problems) => {
                summary.failed += 1;
                warn!(problems = problems.len(), "run failed");
                failures.push(RunFailure { run: label, problems });
            }
        }
    }
    combine_then_fit(plan, &tables, out_dir, &mut summary, &mut failures);
    // A reduction that wrote nothing leaves the output folder empty (its failures are on
    // the terminal); `batch` writes its report every time, for the morning check.
    if summary.ok > 0 {
        write_report(plan, out_dir, &entries);
    }
    (summary, failures)
}

/// Write the HTML report of `out_dir` for the runs of `entries`, unless the config turns
/// it off (`report: { html: false }`). A report that cannot be written is a warning: the
/// tables are the results.
pub fn write_report(plan: &Plan, out_dir: &Path, entries: &[RunEntry]) {
    if !plan.report.html {
        return;
    }
    let settings = crate::report::Settings {
        title: plan.experiment.name.clone(),
        outlier_sigmas: plan.report.outlier_sigmas,
        health_detector: plan.report.health_detector.clone(),
    };
    match crate::report::write(out_dir, &settings, entries) {
        Ok(w) => info!(pages = w.run_pages, kept = w.run_pages_kept, "report written"),
        Err(d) => warn!(file = %d.file.display(), "report not written: {}", d.message),
    }
}

/// Combine the runs (each reduced table with its run and inputs), write the distribution,
/// and fit it.
pub fn combine_then_fit(
    plan: &Plan,
    tables: &[(DataFrame, RunInputs)],
    out_dir: &Path,
    summary: &mut Summary,
    failures: &mut Vec<RunFailure>,
) {
    let frames: Vec<DataFrame> = tables.iter().map(|(t, _)| t.clone()).collect();
    let runs: Vec<RunInputs> = tables.iter().map(|(_, r)| r.clone()).collect();
    let experiment = plan.experiment();
    let fitted = match combine_and_write(plan, &frames, &runs, out_dir) {
        Ok(Some(combined)) => run_fits(&plan.fits, &experiment, &[combined], &runs, out_dir, failures),
        Ok(None) => run_fits(&plan.fits, &experiment, &frames, &runs, out_dir, failures),
        Err(d) => {
            failures.push(RunFailure { run: "combination".into(), problems: vec![d] });
            FitCounts::default()
        }
    };
    summary.fits_ok += fitted.ok;
    summary.fits_failed += fitted.failed;
    if plan.report.plots {
        draw_plots(out_dir);
    }
}

/// Draw the combined angular distribution, with the fits in the output folder, into
/// angular_distribution.svg. With no run reduced there is no distribution and nothing is
/// drawn (an output folder holds nothing when nothing was reduced; the summary line says
/// why). A plot that cannot be drawn is a warning: the tables are the results, the plot
/// only shows them.
fn draw_plots(out_dir: &Path) {
    let table = out_dir.join(ANGULAR_DISTRIBUTION_PARQUET);
    if !table.is_file() {
        return;
    }
    let svg = out_dir.join(crate::layout::ANGULAR_DISTRIBUTION_SVG);
    if let Err(d) = crate::plot::draw(crate::plot::Kind::AngularDistribution, &table, &svg, None, None, 3.0) {
        warn!(file = %d.file.display(), "plot not drawn: {}", d.message);
    }
    // The landscape of each fit that found several minima, in its folder; fit.json is
    // read once, and the minima drawn from it.
    for fit in crate::layout::fit_dirs(&out_dir.join(crate::layout::FITS_DIR)) {
        let minima = std::fs::read_to_string(fit.join(crate::layout::FIT_JSON))
            .ok()
            .and_then(|t| serde_json::from_str::<serde_json::Value>(&t).ok())
            .map(|f| crate::plot::minima_of(&f))
            .unwrap_or_default();
        if minima.len() > 1 {
            let svg = fit.join(crate::layout::LANDSCAPE_SVG);
            let drawn = crate::plot::draw_minima(&minima, crate::plot::Format::Svg).and_then(|bytes| {
                crate::tables::write_atomic(&svg, &bytes)
                    .map_err(|e| Diagnostic::new(&svg, "", format!("cannot write the plot: {e}")))
            });
            if let Err(d) = drawn {
                warn!(file = %d.file.display(), "plot not drawn: {}", d.message);
            }
        }
    }
}

/// Combine the reduced tables of the runs into one angular distribution per state
/// ([`stages::combine`]), write it with its covariance matrix and its provenance record
/// (`runs`: each run that went in with the hashes of its inputs) into `out_dir`, and
/// return it (`None` when the tables lack the CM cross sections).
///
/// # Errors
/// A row that cannot be weighted, or an output that cannot be written.
pub fn combine_and_write(
    plan: &Plan,
    tables: &[DataFrame],
    runs: &[RunInputs],
    out_dir: &Path,
) -> Result<Option<DataFrame>, Diagnostic> {
    let fail = |m: String| Diagnostic::new(out_dir, "", m);
    let mut rows = Vec::new();
    for t in tables {
        let f = |n: &str| stages::table::f64_values(t, n);
        let s = |n: &str| stages::table::str_values(t, n);
        let (Ok(run), Ok(det), Ok(state), Ok(lab), Ok(cm), Ok(y), Ok(stat), Ok(sys), Ok(norm)) = (
            s("run"),
            s("detector"),
            s("state"),
            f("theta_lab_deg"),
            f("theta_cm_deg"),
            f("dsdo_cm_mb_sr"),
            f("stat_err_mb_sr"),
            f("sys_err_mb_sr"),
            f("norm_rel_err"),
        ) else {
            return Ok(None);
        };
        let shared = f("target_atoms_rel_err").unwrap_or_else(|_| vec![0.0; t.height()]);
        let counts = stages::fit::row_counts(t).map_err(|e| fail(e.to_string()))?;
        let few = |c: &stages::fit::RowCounts| c.upper_limit || c.gross < plan.combine.poisson_below_counts;
        let branch = stages::table::f64_values_or(t, "branch", 1.0).unwrap_or_else(|_| vec![1.0; t.height()]);
        for i in 0..t.height() {
            rows.push(stages::combine::Row {
                run: run[i].clone(),
                detector: det[i].clone(),
                state: state[i].clone(),
                branch: if branch[i] > 1.5 { 2 } else { 1 },
                theta_lab_deg: lab[i],
                theta_cm_deg: cm[i],
                dsdo_cm_mb_sr: y[i],
                stat_err_mb_sr: stat[i],
                sys_err_mb_sr: sys[i],
                norm_rel_err: norm[i],
                shared_rel_err: shared[i],
                counts: counts.get(i).copied().flatten().filter(few),
            });
        }
    }
    if rows.is_empty() {
        return Ok(None);
    }
    let (points, cov) =
        stages::combine::combine(&rows, plan.combine.angle_tolerance_deg).map_err(|e| fail(e.to_string()))?;
    let col = |name: &str, f: &dyn Fn(&stages::combine::Point) -> f64| {
        Column::new(name.into(), points.iter().map(f).collect::<Vec<_>>())
    };
    let mut table = DataFrame::new_infer_height(vec![
        Column::new("state".into(), points.iter().map(|p| p.state.clone()).collect::<Vec<_>>()),
        col("theta_lab_deg", &|p| p.theta_lab_deg),
        col("theta_cm_deg", &|p| p.theta_cm_deg),
        col("dsdo_cm_mb_sr", &|p| p.dsdo_cm_mb_sr),
        col("stat_err_mb_sr", &|p| p.stat_err_mb_sr),
        col("sys_err_mb_sr", &|p| p.sys_err_mb_sr),
        col("norm_rel_err", &|p| p.norm_rel_err),
        Column::new("rows".into(), points.iter().map(|p| p.rows as u32).collect::<Vec<_>>()),
        Column::new("members".into(), points.iter().map(|p| p.members.clone()).collect::<Vec<_>>()),
    ])
    .map_err(|e| fail(e.to_string()))?;
    // Long format, non-zero elements only (i, j index the points in table order).
    let n = points.len();
    let nonzero: Vec<(u32, u32, f64)> = (0..n)
        .flat_map(|i| (0..n).map(move |j| (i, j)))
        .filter(|(i, j)| cov[i * n + j] != 0.0)
        .map(|(i, j)| (i as u32, j as u32, cov[i * n + j]))
        .collect();
    let mut cov_table = DataFrame::new_infer_height(vec![
        Column::new("i".into(), nonzero.iter().map(|e| e.0).collect::<Vec<_>>()),
        Column::new("j".into(), nonzero.iter().map(|e| e.1).collect::<Vec<_>>()),
        Column::new("covariance_mb2_sr2".into(), nonzero.iter().map(|e| e.2).collect::<Vec<_>>()),
    ])
    .map_err(|e| fail(e.to_string()))?;
    let cov_csv = csv_bytes(&mut cov_table).map_err(|e| fail(e.to_string()))?;
    // The config by its name, relative to its folder like the inputs: the record does not
    // depend on where xsflow was started, so merged shards give the bytes of one batch.
    let config_name = Path::new(plan.config_path.file_name().unwrap_or_default());
    let record = CombinedProvenance {
        made_with: MadeWith::new(config_name, plan.config_sha256.clone()),
        stages: stage_names(plan),
        runs: runs.to_vec(),
        created_utc: rfc3339_utc(record_time_s()),
    };
    let record = serde_json::to_string_pretty(&record).map_err(|e| fail(e.to_string()))?;
    let files = [
        (out_dir.join(ANGULAR_DISTRIBUTION_CSV), csv_bytes(&mut table).map_err(|e| fail(e.to_string()))?),
        (
            out_dir.join(ANGULAR_DISTRIBUTION_PARQUET),
            parquet_bytes(&mut table, vec![(PROVENANCE_KEY.to_string(), record.clone())])
                .map_err(|e| fail(e.to_string()))?,
        ),
        (out_dir.join(COVARIANCE_CSV), cov_csv),
        (out_dir.join(ANGULAR_DISTRIBUTION_PROVENANCE_JSON), format!("{record}\n").into_bytes()),
    ];
    write_all_atomic(&files).map_err(|e| e.diagnostic())?;
    Ok(Some(table))
}

/// The configured stages, in order, on a run's first stage table: what `reduce` does to it
/// and what `check` tries on yields tables (they are small), so that `check` refuses what
/// `reduce` would.
///
/// # Errors
/// The first stage that cannot run, with the file its problem lies in.
fn run_stages(plan: &Plan, run: &LoadedRun, mut table: DataFrame) -> Result<DataFrame, Vec<Diagnostic>> {
    let yields = &run.yields_path;
    let ctx = RunContext { setup: run.setup(plan), run: &run.record };
    for s in &plan.stages {
        let _span = info_span!("stage", stage = s.stage.name()).entered();
        let key = format!("{} ({})", s.key, s.stage.name());
        for need in s.stage.needs() {
            if table.column(need).is_err() {
                let e =
                    StageError::MissingColumn { column: need.to_string(), found: stages::table::column_list(&table) };
                return Err(vec![table_diagnostic(yields, &key, &e)
                    .with_help("add the column to the yields table, or a stage that adds it earlier in the config")]);
            }
        }
        table = s.stage.run(table, &ctx).map_err(|e| {
            let file = match e.origin() {
                Origin::Table => yields,
                Origin::RunRecord => &run.record_path,
                Origin::Config => &plan.config_path,
            };
            vec![table_diagnostic(file, &key, &e)]
        })?;
        debug!(rows = table.height(), "stage done");
    }
    Ok(table)
}

/// Every problem `xsflow check` can find in the runs without writing anything: record
/// problems; for yields tables, the table's problems and then every stage run on it (so a
/// state that cannot reach a detector, or a double-valued angle without its branch, is
/// found); for event and spectrum files, their columns (the files may be large).
pub fn check_runs(plan: &Plan) -> Vec<RunFailure> {
    let mut failures = Vec::new();
    for planned in &plan.runs {
        let problems = match &planned.loaded {
            Err(d) => d.clone(),
            // Event and spectrum files: their columns only (the files may be large).
            Ok(run) if run.data != RunData::Yields => match run.raw(plan) {
                Some(raw) => crate::events::check_file(&run.yields_path, raw, run.data == RunData::Spectra)
                    .err()
                    .map(|e| vec![Diagnostic::new(&run.yields_path, "", e.to_string())])
                    .unwrap_or_default(),
                None => Vec::new(),
            },
            Ok(run) => match read_table(&run.yields_path) {
                Err(e) => vec![Diagnostic::new(&run.yields_path, "", e.to_string())],
                Ok(raw) => match stages::yields::prepare(&raw, run.setup(plan), &run.record.run.0) {
                    Err(errs) => errs.iter().map(|e| table_diagnostic(&run.yields_path, "", e)).collect(),
                    Ok(prepared) => run_stages(plan, run, prepared.table).err().unwrap_or_default(),
                },
            },
        };
        if !problems.is_empty() {
            failures.push(RunFailure { run: planned.label(), problems });
        }
    }
    failures
}
