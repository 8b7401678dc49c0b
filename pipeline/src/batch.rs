//! `xsflow batch`: every new or changed run of a config, incrementally, into one output
//! folder with a run catalogue; runs spread over `--jobs` threads, optionally one shard of
//! a cluster job array (`--shard K/N`). A run is changed when the SHA-256 of its record and
//! data file, or of the config sections that affect every run (reaction, target, detectors,
//! arms, the per-run stages, raw), differs from its last successful processing. One bad run never
//! stops the others; outputs are written atomically before the catalogue records them, so a
//! batch killed at any moment leaves either the old or the new state of each run. A record
//! or data file that changes or disappears while its run is reduced fails that run (the
//! next batch picks it up). An output folder that cannot take the outputs (full disk,
//! read-only or unwritable) stops the batch with one error; the runs it hit keep their
//! files and catalogue entries as they were.

use std::fmt::Display;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicUsize, Ordering};
use std::sync::{Mutex, MutexGuard};
use std::time::Instant;

use polars::prelude::DataFrame;
use tracing::{info, info_span, warn};

use crate::catalogue::{Catalogue, CatalogueError, RunStatus, CATALOGUE_FILE};
use crate::config::YamlFile;
use crate::error::{Diagnostic, RunFailure};
use crate::layout::{ANGULAR_DISTRIBUTION_PARQUET, CROSS_SECTIONS_PARQUET, FITS_DIR, FIT_JSON, PROVENANCE_JSON};
use crate::plan::{Plan, PlannedRun};
use crate::provenance::{sha256_hex, RunInputs};
use crate::run::{output_files, reduce_run, run_entry, Summary};
use crate::tables::{write_all_atomic, WriteError};

/// Settings of a batch.
#[derive(Debug, Clone)]
pub struct BatchOptions {
    /// Output folder.
    pub out: PathBuf,
    /// Worker threads.
    pub jobs: usize,
    /// This shard `(k, n)`, 1 ≤ k ≤ n.
    pub shard: Option<(u64, u64)>,
    /// Reprocess every run.
    pub force: bool,
    /// Only say what would be done.
    pub dry_run: bool,
}

/// What a batch did.
#[derive(Debug, Default, Clone, PartialEq, Eq, serde::Serialize)]
pub struct BatchSummary {
    /// Runs processed successfully.
    pub ok: usize,
    /// Runs that failed.
    pub failed: usize,
    /// Runs unchanged since their last success.
    pub skipped: usize,
    /// Runs of other shards.
    pub other_shards: usize,
    /// Fits that converged / failed.
    pub fits_ok: usize,
    /// Fits that failed or did not converge.
    pub fits_failed: usize,
}

/// A `--shard` text that names no shard.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[error("--shard {text}: expected K/N with whole numbers 1 <= K <= N, such as 2/8")]
pub struct ShardError {
    /// The text given.
    pub text: String,
}

impl BatchSummary {
    /// Count the runs whose outputs could not be read back (see `ok_tables`) as failed,
    /// and no longer as what they were counted before: ok when `processed_now(run)` (this
    /// batch reduced it, or a merge copied it), else skipped. Each run is counted once.
    fn count_unreadable(&mut self, unreadable: &[RunFailure], processed_now: impl Fn(&str) -> bool) {
        for f in unreadable {
            let before = if processed_now(&f.run) { &mut self.ok } else { &mut self.skipped };
            *before = before.saturating_sub(1);
            self.failed += 1;
        }
    }
}

/// Parse `K/N`.
///
/// # Errors
/// Anything but two whole numbers with 1 ≤ K ≤ N.
pub fn parse_shard(text: &str) -> Result<(u64, u64), ShardError> {
    let bad = || ShardError { text: text.to_string() };
    let (k, n) = text.split_once('/').ok_or_else(bad)?;
    let (k, n): (u64, u64) = (k.trim().parse().map_err(|_| bad())?, n.trim().parse().map_err(|_| bad())?);
    if k == 0 || n == 0 || k > n {
        return Err(bad());
    }
    Ok((k, n))
}

/// The shard (1-based) a run id belongs to among `n`: the first 8 bytes of SHA-256 of the
/// id, modulo n, so the split is the same on every machine.
pub fn shard_of(run: &str, n: u64) -> u64 {
    let h = sha256_hex(run.as_bytes());
    u64::from_str_radix(&h[..16], 16).unwrap_or(0) % n + 1
}

/// SHA-256 of the config sections that affect every run (fit entries excluded: they
/// change no run's outputs).
///
/// # Errors
/// The config cannot be read.
pub fn config_hash(config_path: &Path) -> Result<String, Diagnostic> {
    let file = YamlFile::read(config_path)?;
    let mut parts = Vec::new();
    for key in ["reaction", "target", "detectors", "arms", "stages", "raw"] {
        let mut v = file.value.get(key).cloned().unwrap_or(serde_yaml::Value::Null);
        if let (Some(items), "stages") = (v.as_sequence_mut(), key) {
            items.retain(|i| i.get("type").and_then(|t| t.as_str()) != Some("fit"));
        }
        parts.push(serde_json::to_string(&v).unwrap_or_default());
    }
    Ok(sha256_hex(parts.join("\n").as_bytes()))
}

/// One run's input hash: record bytes and data file; `None` when the record did not load
/// or the data file cannot be read (the run is then processed, and its failure says why).
fn input_hash(run: &PlannedRun) -> Option<String> {
    let loaded = run.loaded.as_ref().ok()?;
    let data = loaded.data_hash().ok()?;
    Some(sha256_hex(format!("{}\n{data}", sha256_hex(&loaded.record_bytes)).as_bytes()))
}

/// The catalogue shared by the batch's threads, locked.
fn lock(catalogue: &Mutex<Catalogue>) -> Result<MutexGuard<'_, Catalogue>, CatalogueError> {
    catalogue.lock().map_err(|_| CatalogueError::Poisoned)
}

/// Process the runs of `plan` that are new or changed.
///
/// # Errors
/// An output folder or catalogue that cannot be used (nothing is processed then).
pub fn batch(plan: &Plan, opts: &BatchOptions) -> Result<(BatchSummary, Vec<RunFailure>, Vec<String>), Diagnostic> {
    let fail = |m: &dyn Display| Diagnostic::new(&opts.out, "", m.to_string());
    let unusable =
        |m: String| fail(&m).with_help("the output folder must exist or be creatable, be writable and have free space");
    std::fs::create_dir_all(&opts.out).map_err(|e| unusable(format!("cannot create the output folder: {e}")))?;
    probe_writable(&opts.out).map_err(|e| unusable(format!("cannot write into the output folder: {e}")))?;
    remove_stale_temporaries(&opts.out);
    let catalogue = Catalogue::open(&opts.out).map_err(|e| fail(&e))?;
    let shard_text = opts.shard.map_or_else(|| "1/1".to_string(), |(k, n)| format!("{k}/{n}"));
    match catalogue.meta("shard").map_err(|e| fail(&e))? {
        Some(s) if s != shard_text => {
            return Err(fail(&format!("this output folder holds shard {s}; it cannot take shard {shard_text}")));
        }
        _ => {}
    }
    catalogue.set_meta("shard", &shard_text).map_err(|e| fail(&e))?;
    let config_abs = std::fs::canonicalize(&plan.config_path).unwrap_or_else(|_| plan.config_path.clone());
    catalogue.set_meta("config_file", &config_abs.to_string_lossy()).map_err(|e| fail(&e))?;
    let catalogue = Mutex::new(catalogue);
    let config_sha = config_hash(&plan.config_path)?;
    let mut summary = BatchSummary::default();
    let mut todo: Vec<(&PlannedRun, String)> = Vec::new();
    let mut newly_skipped = Vec::new();
    let mut lines = Vec::new();
    for run in &plan.runs {
        let label = run.label();
        if let Some((k, n)) = opts.shard {
            if shard_of(&label, n) != k {
                summary.other_shards += 1;
                continue;
            }
        }
        let hash = input_hash(run).unwrap_or_default();
        let previous = lock(&catalogue).and_then(|c| c.get(&label)).map_err(|e| fail(&e))?;
        let unchanged = previous.as_ref().is_some_and(|p| {
            p.status.has_outputs()
                && p.input_sha256 == hash
                && p.config_sha256 == config_sha
                && opts.out.join(&label).join(CROSS_SECTIONS_PARQUET).is_file()
        });
        if unchanged && !opts.force {
            summary.skipped += 1;
            lines.push(format!("{label}: unchanged"));
            if previous.as_ref().is_some_and(|p| p.status == RunStatus::Ok) {
                newly_skipped.push(label);
            }
        } else {
            let why = match &previous {
                None => "new",
                Some(p) if !p.status.has_outputs() => "failed before",
                Some(p) if p.config_sha256 != config_sha => "config changed",
                Some(_) if opts.force => "forced",
                Some(_) => "inputs changed",
            };
            lines.push(format!("{label}: {why}"));
            todo.push((run, hash));
        }
    }
    if opts.dry_run {
        return Ok((summary, Vec::new(), lines));
    }
    // A progress bar for a person at a terminal; cron and batch schedulers get the log lines.
    let bar = if std::io::IsTerminal::is_terminal(&std::io::stderr()) && !todo.is_empty() {
        let b = indicatif::ProgressBar::new(todo.len() as u64);
        if let Ok(style) = indicatif::ProgressStyle::with_template("{bar:40} {pos}/{len} runs, {elapsed} (eta {eta})") {
            b.set_style(style);
        }
        Some(b)
    } else {
        None
    };
    let next = AtomicUsize::new(0);
    let failures = Mutex::new(Vec::new());
    let counts = Mutex::new((0usize, 0usize));
    // The first problem of the output folder itself (a full disk, a read-only folder, a
    // catalogue that cannot be written): no run starts after it, and the run it hit is not
    // recorded, so the catalogue keeps what it said of that run before.
    let stopped: Mutex<Option<String>> = Mutex::new(None);
    let stop = |why: String| {
        if let Ok(mut s) = stopped.lock() {
            s.get_or_insert(why);
        }
    };
    std::thread::scope(|scope| {
        for _ in 0..opts.jobs.max(1).min(todo.len().max(1)) {
            scope.spawn(|| loop {
                if stopped.lock().map_or(true, |s| s.is_some()) {
                    break;
                }
                let i = next.fetch_add(1, Ordering::SeqCst);
                let Some((run, hash)) = todo.get(i) else { break };
                let label = run.label();
                let _span = info_span!("run", run = %label).entered();
                let start = Instant::now();
                let result = run.loaded.as_ref().map_err(Clone::clone).and_then(|loaded| {
                    let mut reduced = reduce_run(plan, loaded)?;
                    let files = output_files(&opts.out, &mut reduced).map_err(|d| vec![d])?;
                    Ok((reduced, files))
                });
                let result = match result {
                    Ok((reduced, files)) => match write_all_atomic(&files) {
                        Ok(()) => Ok(reduced),
                        Err(e) => {
                            warn!(error = %e, "output folder cannot be written; the batch stops");
                            stop(e.to_string());
                            break;
                        }
                    },
                    Err(problems) => Err(problems),
                };
                let entry = run_entry(run, hash, &config_sha, start, &result);
                if let Err(e) = lock(&catalogue).and_then(|mut c| c.put(&entry)) {
                    stop(format!("cannot record run {label} in {CATALOGUE_FILE}: {e}"));
                    break;
                }
                if let Some(b) = &bar {
                    b.inc(1);
                }
                if let Ok(mut n) = counts.lock() {
                    match result {
                        Ok(_) => {
                            info!(seconds = entry.seconds, "run reduced");
                            n.0 += 1;
                        }
                        Err(problems) => {
                            warn!(problems = problems.len(), "run failed");
                            n.1 += 1;
                            if let Ok(mut f) = failures.lock() {
                                f.push(RunFailure { run: label, problems });
                            }
                        }
                    }
                }
            });
        }
    });
    if let Some(b) = bar {
        b.finish_and_clear();
    }
    let (ok, failed) = counts.into_inner().unwrap_or_default();
    summary.ok = ok;
    summary.failed = failed;
    let mut failures = failures.into_inner().unwrap_or_default();
    failures.sort_by(|a, b| a.run.cmp(&b.run));
    if let Some(why) = stopped.into_inner().unwrap_or_default() {
        let left = todo.len() - ok - failed;
        return Err(fail(&format!(
            "{why}; the batch stopped: {ok} run(s) written, {failed} failed, {left} not processed (the catalogue \
             keeps what it said of those before); the combination and the fits were not redone"
        ))
        .with_help("free space on the disk or make the output folder writable, then run the batch again: it picks up every run not done"));
    }
    lock(&catalogue)
        .and_then(|mut c| c.mark_skipped(&newly_skipped))
        .map_err(|e| fail(&format!("cannot record the unchanged runs in {CATALOGUE_FILE}: {e}")))?;
    // The combination and the fits again only when what they are made of changed (the ok
    // runs' hashes, the whole config, the fit files) or an output is missing; the key is
    // recorded after they are written, so a batch killed before that redoes them.
    if opts.shard.is_none() {
        let mut guard = lock(&catalogue).map_err(|e| fail(&e))?;
        let key = combined_key(plan, &guard)?;
        let missing = !opts.out.join(ANGULAR_DISTRIBUTION_PARQUET).is_file()
            || plan.fits.iter().any(|f| !opts.out.join(FITS_DIR).join(&f.name).join(FIT_JSON).is_file());
        if missing || guard.meta("combined_key").map_err(|e| fail(&e))?.as_deref() != Some(key.as_str()) {
            let before = failures.len();
            let (tables, unreadable) = ok_tables(plan, &opts.out, &mut guard)?;
            let processed: Vec<String> = todo.iter().map(|(run, _)| run.label()).collect();
            summary.count_unreadable(&unreadable, |run| processed.iter().any(|p| p == run));
            failures.extend(unreadable);
            let mut s = Summary::default();
            crate::run::combine_then_fit(plan, &tables, &opts.out, &mut s, &mut failures);
            summary.fits_ok = s.fits_ok;
            summary.fits_failed = s.fits_failed;
            if failures.len() == before {
                guard.set_meta("combined_key", &key).map_err(|e| fail(&e))?;
            }
        }
        // The report of every run the catalogue knows; each shard's report comes with
        // `merge`.
        let entries = guard.list(false).map_err(|e| fail(&e))?;
        drop(guard);
        crate::run::write_report(plan, &opts.out, &entries);
    }
    Ok((summary, failures, lines))
}

/// Whether the output folder takes a new file: an empty one is written and removed, so
/// that a read-only or unwritable folder is reported before any run is read. Its name is
/// that of a temporary file, removed as stale if a kill leaves it.
fn probe_writable(out: &Path) -> std::io::Result<()> {
    let probe = out.join(format!(".xsflow-probe.tmp-{}", std::process::id()));
    std::fs::write(&probe, b"")?;
    std::fs::remove_file(&probe)
}

/// What the combined distribution and the fits are made of: the ok runs and their hashes,
/// the config file, the fit files.
fn combined_key(plan: &Plan, catalogue: &Catalogue) -> Result<String, Diagnostic> {
    let mut parts = vec![plan.config_sha256.clone()];
    for f in &plan.fits {
        parts.push(sha256_hex(&f.loaded.bytes));
    }
    for run in &plan.runs {
        if let Some(e) =
            catalogue.get(&run.label()).map_err(|e| Diagnostic::new(&plan.config_path, "", e.to_string()))?
        {
            if e.status.has_outputs() {
                parts.push(format!("{} {} {}", e.run, e.input_sha256, e.config_sha256));
            }
        }
    }
    Ok(sha256_hex(parts.join("\n").as_bytes()))
}

/// Remove the temporary files that a killed xsflow left in the output folder (those of
/// processes that no longer run); their final names were never touched.
fn remove_stale_temporaries(out: &Path) {
    let is_stale = |name: &str| {
        name.starts_with('.')
            && name
                .rsplit_once(".tmp-")
                .and_then(|(_, pid)| pid.parse::<u32>().ok())
                .is_some_and(|pid| pid != std::process::id() && !Path::new(&format!("/proc/{pid}")).exists())
    };
    let mut dirs = vec![out.to_path_buf()];
    while let Some(d) = dirs.pop() {
        for e in std::fs::read_dir(&d).into_iter().flatten().flatten() {
            let p = e.path();
            if p.is_dir() {
                dirs.push(p);
            } else if is_stale(&e.file_name().to_string_lossy()) {
                let _ = std::fs::remove_file(&p);
            }
        }
    }
}

/// Reduced tables, each with its run and the hashes of its inputs.
type RunTables = Vec<(DataFrame, RunInputs)>;

/// The reduced tables (with their runs and inputs) of this plan's runs that are `ok` in the
/// catalogue, in run order, read back from the output folder. A run whose table or
/// provenance record cannot be read back fails: it is left out, returned as a failure
/// and marked failed in the catalogue, so that the next batch reduces it again.
///
/// # Errors
/// A catalogue that cannot be read or written.
fn ok_tables(plan: &Plan, out: &Path, catalogue: &mut Catalogue) -> Result<(RunTables, Vec<RunFailure>), Diagnostic> {
    let (mut tables, mut failures) = (Vec::new(), Vec::new());
    for run in &plan.runs {
        let label = run.label();
        let Some(mut entry) = catalogue.get(&label).map_err(|e| Diagnostic::new(out, "", e.to_string()))? else {
            continue;
        };
        if !entry.status.has_outputs() {
            continue;
        }
        let dir = out.join(&label);
        let (table, record) = (dir.join(CROSS_SECTIONS_PARQUET), dir.join(PROVENANCE_JSON));
        let read_back = crate::tables::read_table(&table)
            .map_err(|e| Diagnostic::new(&table, "", e.to_string()))
            .and_then(|t| Ok((t, RunInputs::read(&record).map_err(|e| Diagnostic::new(&record, "", e.to_string()))?)));
        match read_back {
            Ok(t) => tables.push(t),
            Err(d) => {
                let d =
                    d.with_help("the run is left out of the combination and the fits; the next batch reduces it again");
                entry.status = RunStatus::Failed;
                entry.error = d.to_string();
                catalogue.put(&entry).map_err(|e| Diagnostic::new(out, "", e.to_string()))?;
                failures.push(RunFailure { run: label, problems: vec![d] });
            }
        }
    }
    Ok((tables, failures))
}

/// Merge the output folders of the shards of one batch into `out`: the run folders copied,
/// the catalogues merged in run order, then the combination and the fits run over all runs,
/// so that the result is what a single batch gives.
///
/// # Errors
/// Folders that are not batch outputs, shards of different configs or of different N, a
/// shard given twice, a run in two shards.
pub fn merge(dirs: &[PathBuf], out: &Path) -> Result<(BatchSummary, Vec<RunFailure>), Diagnostic> {
    let fail = |p: &Path, m: &dyn Display| Diagnostic::new(p, "", m.to_string());
    let mut config: Option<String> = None;
    let mut shards: Vec<(u64, u64)> = Vec::new();
    let mut entries = Vec::new();
    for d in dirs {
        let c = Catalogue::open(d).map_err(|e| fail(d, &e))?;
        let shard = c
            .meta("shard")
            .map_err(|e| fail(d, &e))?
            .ok_or_else(|| fail(d, &"not a batch output (no shard recorded)"))?;
        let (k, n) = parse_shard(&shard).map_err(|e| fail(d, &e))?;
        if let Some(&(_, n0)) = shards.first() {
            if n != n0 {
                return Err(fail(
                    d,
                    &format!("shard {k}/{n} does not belong with shards of {n0}: the shards give inconsistent N"),
                ));
            }
        }
        if shards.iter().any(|s| s.0 == k) {
            return Err(fail(d, &format!("shard {k}/{n} is given twice")));
        }
        shards.push((k, n));
        let cf = c.meta("config_file").map_err(|e| fail(d, &e))?.unwrap_or_default();
        match &config {
            Some(c0) if *c0 != cf => return Err(fail(d, &format!("made from {cf}, the other shards from {c0}"))),
            _ => config = Some(cf),
        }
        for e in c.list(false).map_err(|e| fail(d, &e))? {
            entries.push((d.clone(), e));
        }
    }
    let n = shards.first().map_or(1, |s| s.1);
    if shards.len() as u64 != n {
        let mut have: Vec<u64> = shards.iter().map(|s| s.0).collect();
        have.sort_unstable();
        let missing: Vec<String> = (1..=n).filter(|k| !have.contains(k)).map(|k| format!("{k}/{n}")).collect();
        return Err(fail(out, &format!("shards missing: {}", missing.join(", "))));
    }
    entries.sort_by(|a, b| a.1.run.cmp(&b.1.run));
    if let Some(w) = entries.windows(2).find(|w| w[0].1.run == w[1].1.run) {
        return Err(fail(&w[1].0, &format!("run {} is in two shards", w[1].1.run)));
    }
    std::fs::create_dir_all(out).map_err(|e| fail(out, &format!("cannot create the output folder: {e}")))?;
    let mut merged = Catalogue::open(out).map_err(|e| fail(out, &e))?;
    merged.set_meta("shard", "1/1").map_err(|e| fail(out, &e))?;
    let config = config.unwrap_or_default();
    merged.set_meta("config_file", &config).map_err(|e| fail(out, &e))?;
    let mut summary = BatchSummary::default();
    for (dir, e) in &entries {
        let src = dir.join(&e.run);
        if e.status.has_outputs() {
            copy_dir(&src, &out.join(&e.run)).map_err(|e| fail(&src, &e))?;
            summary.ok += 1;
        } else {
            summary.failed += 1;
        }
        merged.put(e).map_err(|e| fail(out, &e))?;
    }
    let plan = crate::plan::plan(Path::new(&config))
        .map_err(|d| d.into_iter().next().unwrap_or_else(|| fail(out, &"bad config")))?;
    let (tables, mut failures) = ok_tables(&plan, out, &mut merged)?;
    // Every run read back was copied, and counted ok.
    summary.count_unreadable(&failures, |_| true);
    let mut s = Summary::default();
    crate::run::combine_then_fit(&plan, &tables, out, &mut s, &mut failures);
    summary.fits_ok = s.fits_ok;
    summary.fits_failed = s.fits_failed;
    let merged_entries = merged.list(false).map_err(|e| fail(out, &e))?;
    crate::run::write_report(&plan, out, &merged_entries);
    Ok((summary, failures))
}

/// Why a shard's run folder could not be copied.
#[derive(Debug, thiserror::Error)]
pub enum CopyError {
    /// The copy's folder cannot be created.
    #[error("cannot create {}: {source}", .path.display())]
    Create {
        /// The folder.
        path: PathBuf,
        /// The I/O error.
        source: std::io::Error,
    },
    /// The folder cannot be listed.
    #[error("cannot list the folder: {0}")]
    List(#[source] std::io::Error),
    /// A file of it cannot be read.
    #[error("{}: {source}", .path.display())]
    Read {
        /// The file.
        path: PathBuf,
        /// The I/O error.
        source: std::io::Error,
    },
    /// The copy cannot be written.
    #[error(transparent)]
    Write(#[from] WriteError),
}

/// Copy a run folder, its files together and atomically.
fn copy_dir(src: &Path, dst: &Path) -> Result<(), CopyError> {
    std::fs::create_dir_all(dst).map_err(|source| CopyError::Create { path: dst.to_path_buf(), source })?;
    let mut names: Vec<PathBuf> =
        std::fs::read_dir(src).map_err(CopyError::List)?.flatten().map(|e| e.path()).filter(|p| p.is_file()).collect();
    names.sort();
    let mut files = Vec::new();
    for path in names {
        let bytes = std::fs::read(&path).map_err(|source| CopyError::Read { path: path.clone(), source })?;
        let name = path.file_name().map(|n| n.to_os_string()).unwrap_or_default();
        files.push((dst.join(name), bytes));
    }
    Ok(write_all_atomic(&files)?)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_run_whose_outputs_cannot_be_read_back_is_counted_once_as_failed() {
        let failure = |run: &str| RunFailure { run: run.into(), problems: Vec::new() };
        let summary = |ok, failed, skipped| BatchSummary { ok, failed, skipped, ..BatchSummary::default() };
        // (before, unreadable runs, runs reduced by this batch, after)
        let cases = [
            // Issue 11: a skipped run that failed to read back was counted skipped and failed.
            (summary(1, 0, 3), vec!["0102"], vec!["0101"], summary(1, 1, 2)),
            (summary(1, 0, 3), vec!["0101"], vec!["0101"], summary(0, 1, 3)),
            (summary(2, 1, 1), vec!["0101", "0103"], vec!["0101", "0102"], summary(1, 3, 0)),
            (summary(4, 0, 0), vec![], vec!["0101"], summary(4, 0, 0)),
        ];
        for (mut s, unreadable, processed, want) in cases {
            let unreadable: Vec<RunFailure> = unreadable.into_iter().map(failure).collect();
            let runs = s.ok + s.failed + s.skipped;
            s.count_unreadable(&unreadable, |run| processed.contains(&run));
            assert_eq!(s, want, "{unreadable:?}");
            assert_eq!(s.ok + s.failed + s.skipped, runs, "every run counted once");
        }
    }
}
