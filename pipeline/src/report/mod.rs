//! The static HTML report of an output folder, `report/index.html`: what a person checks
//! in the morning. A summary line, the failed runs first with their messages, the run
//! health plot, the angular distribution with its fits and their parameters, a table of
//! every run, and one page per run (`report/runs/<run>.html`) with its tallies, its cross
//! sections and its spectra with the gates.
//!
//! Everything is read from the output folder and the catalogue entries; the report never
//! re-reduces. Plots are inline SVG, the style sheet is inline, there is no script: the
//! pages open from the file system and the folder can be copied anywhere with the outputs
//! it links to. A run page is rewritten only when its run was processed again (its
//! catalogue entry changed), so an unchanged nightly rerun only rewrites the index. The
//! pages hold no timing, so under `SOURCE_DATE_EPOCH` the same outputs give the same bytes.

mod html;
mod run_page;

use std::fmt::Write as _;
use std::path::Path;

use crate::catalogue::{Catalogue, RunEntry, RunStatus, CATALOGUE_FILE};
use crate::error::Diagnostic;
use crate::layout::{
    is_folder_name, ANGULAR_DISTRIBUTION_CSV, ANGULAR_DISTRIBUTION_PARQUET, ANGULAR_DISTRIBUTION_SVG,
    CROSS_SECTIONS_PARQUET, FITS_DIR, FIT_JSON, REPORT_DIR, REPORT_INDEX, REPORT_RUNS_DIR,
};
use crate::plot::{describe_outliers, run_figures, run_health, Format, HealthRun, RunFigures};
use crate::tables::write_atomic;
use html::{badge, escape, figure, number, page, table, Cell};

/// What the report shows beside the outputs.
#[derive(Debug, Clone)]
pub struct Settings {
    /// The experiment's name, in the title.
    pub title: String,
    /// Run health marks runs farther than this many robust standard deviations from the
    /// median.
    pub outlier_sigmas: f64,
    /// The detector whose net counts per µC run health shows (none: not shown).
    pub health_detector: Option<String>,
}

/// What writing the report did.
#[derive(Debug, Default, Clone, Copy, PartialEq, Eq)]
pub struct Written {
    /// Run pages written.
    pub run_pages: usize,
    /// Run pages kept because their run did not change.
    pub run_pages_kept: usize,
}

/// Write the report of `out_dir` for `runs` (their catalogue entries, or those `reduce`
/// made for the runs it reduced).
///
/// # Errors
/// A page that cannot be written, naming it. A page whose parts cannot be read (an
/// unreadable table) says so on the page instead.
pub fn write(out_dir: &Path, settings: &Settings, runs: &[RunEntry]) -> Result<Written, Diagnostic> {
    let report_dir = out_dir.join(REPORT_DIR);
    let runs_dir = report_dir.join(REPORT_RUNS_DIR);
    std::fs::create_dir_all(&runs_dir)
        .map_err(|e| Diagnostic::new(&runs_dir, "", format!("cannot create the report folder: {e}")))?;
    let mut written = Written::default();
    let mut figures = std::collections::BTreeMap::new();
    for entry in runs.iter().filter(|e| is_folder_name(&e.run)) {
        let (fresh, f) = run_page::write(out_dir, &runs_dir, entry)?;
        if fresh {
            written.run_pages += 1;
        } else {
            written.run_pages_kept += 1;
        }
        if let Some(f) = f {
            figures.insert(entry.run.clone(), f);
        }
    }
    let health = health_runs(runs, settings.health_detector.as_deref(), |e| figures.get(&e.run).cloned());
    let index = index_page(out_dir, settings, runs, &health);
    write_if_changed(&report_dir.join(REPORT_INDEX), index.as_bytes())?;
    Ok(written)
}

/// Write `bytes` atomically unless the file already holds them (its time stamp then stays).
fn write_if_changed(path: &Path, bytes: &[u8]) -> Result<(), Diagnostic> {
    if std::fs::read(path).is_ok_and(|old| old == bytes) {
        return Ok(());
    }
    write_atomic(path, bytes).map_err(|e| Diagnostic::new(path, "", format!("cannot write the report page: {e}")))
}

/// The run-health figures of `runs`; `figures` gives each run's counts and luminosity
/// ratio (none for a run without outputs), `detector` the detector of the counts per µC.
pub fn health_runs(
    runs: &[RunEntry],
    detector: Option<&str>,
    figures: impl Fn(&RunEntry) -> Option<RunFigures>,
) -> Vec<HealthRun> {
    runs.iter()
        .map(|e| {
            let f = figures(e).unwrap_or_default();
            let counts_per_uc = detector.and_then(|d| {
                let n = f.counts_by_detector.iter().find(|(k, _)| k == d)?.1;
                e.charge_c.filter(|q| *q > 0.0).map(|q| n / (q * 1e6))
            });
            HealthRun {
                run: e.run.clone(),
                charge_uc: e.charge_c.map(|q| q * 1e6),
                live_fraction: e.live_fraction,
                counts_per_uc,
                luminosity_ratio: f.luminosity_monitor_over_absolute,
            }
        })
        .collect()
}

/// The run-health figures of a run in `out_dir`, read from its table (none for a run
/// without outputs or an unreadable table).
fn figures_from_table(out_dir: &Path, e: &RunEntry) -> Option<RunFigures> {
    (e.status.has_outputs() && is_folder_name(&e.run))
        .then(|| run_figures(&out_dir.join(&e.run).join(CROSS_SECTIONS_PARQUET)).ok())
        .flatten()
}

/// The run-health figures of a `batch` output folder, from its catalogue.
///
/// # Errors
/// A folder without a catalogue, or a catalogue that cannot be read.
pub fn health_of_batch(dir: &Path, detector: Option<&str>) -> Result<Vec<HealthRun>, Diagnostic> {
    let file = dir.join(CATALOGUE_FILE);
    if !file.is_file() {
        return Err(Diagnostic::new(
            dir,
            "",
            format!("no {CATALOGUE_FILE} here; run health needs a batch output folder"),
        )
        .with_help("give the folder that `xsflow batch --out` wrote"));
    }
    let entries = Catalogue::open(dir)
        .and_then(|c| c.list(false))
        .map_err(|e| Diagnostic::new(&file, "", format!("cannot read the catalogue: {e}")))?;
    Ok(health_runs(&entries, detector, |e| figures_from_table(dir, e)))
}

/// The index page.
fn index_page(out_dir: &Path, settings: &Settings, runs: &[RunEntry], health: &[HealthRun]) -> String {
    let count = |s: RunStatus| runs.iter().filter(|e| e.status == s).count();
    let mut body = String::new();
    let _ = write!(
        body,
        "<header>\n<h1>{}</h1>\n<p class=\"meta\">Report written {} by xsflow {}.</p>\n\
         <p class=\"summary\">{} run(s): {} ok · {} failed · {} skipped (unchanged)</p>\n</header>\n",
        escape(&settings.title),
        crate::provenance::rfc3339_utc(crate::provenance::record_time_s()),
        env!("CARGO_PKG_VERSION"),
        runs.len(),
        count(RunStatus::Ok),
        count(RunStatus::Failed),
        count(RunStatus::Skipped),
    );
    body.push_str(&failed_section(runs));
    body.push_str(&health_section(settings, health));
    body.push_str(&distribution_section(out_dir));
    body.push_str(&fits_section(out_dir));
    body.push_str(&runs_section(runs));
    page(&settings.title, &body)
}

/// Failed runs with their messages, first on the page.
fn failed_section(runs: &[RunEntry]) -> String {
    let failed: Vec<&RunEntry> = runs.iter().filter(|e| e.status == RunStatus::Failed).collect();
    if failed.is_empty() {
        return String::new();
    }
    let mut out = format!("<section id=\"failed\">\n<h2>Failed runs ({})</h2>\n", failed.len());
    for e in failed {
        let _ = write!(
            out,
            "<div class=\"problem\"><h3>{}</h3>\n<pre>{}</pre></div>\n",
            run_link(&e.run),
            escape(&e.error)
        );
    }
    out.push_str("</section>\n");
    out
}

/// The run's name, linked to its page when it has one.
fn run_link(run: &str) -> String {
    if is_folder_name(run) {
        format!("<a href=\"{REPORT_RUNS_DIR}/{0}.html\">{0}</a>", escape(run))
    } else {
        escape(run)
    }
}

fn health_section(settings: &Settings, health: &[HealthRun]) -> String {
    let mut out = String::from("<section id=\"health\">\n<h2>Run health</h2>\n");
    match run_health(health, settings.outlier_sigmas, Format::Svg) {
        Ok((svg, marked)) => {
            let detector =
                settings.health_detector.as_deref().map_or_else(String::new, |d| format!(", net counts per µC in {d}"));
            out.push_str(&figure(&svg, &format!("Charge, live fraction{detector} per run; median as a grey line.")));
            if let Some(text) = describe_outliers(&marked, settings.outlier_sigmas) {
                let _ = writeln!(out, "<p class=\"problem\">{}</p>", escape(&text));
            }
        }
        Err(d) => {
            let _ = writeln!(out, "<p class=\"problem\">Not drawn: {}</p>", escape(&d.message));
        }
    }
    out.push_str("</section>\n");
    out
}

fn distribution_section(out_dir: &Path) -> String {
    let mut out = String::from("<section id=\"distribution\">\n<h2>Angular distribution</h2>\n");
    match std::fs::read_to_string(out_dir.join(ANGULAR_DISTRIBUTION_SVG)) {
        Ok(svg) => {
            out.push_str(&figure(svg.as_bytes(), "dσ/dΩ in the centre of mass with the fitted curves; pulls below."))
        }
        Err(_) if out_dir.join(ANGULAR_DISTRIBUTION_PARQUET).is_file() => {
            out.push_str("<p>The plot was not drawn (<code>report: { plots: false }</code>).</p>\n");
        }
        Err(_) => out.push_str("<p>No combined distribution: no run was reduced.</p>\n"),
    }
    if out_dir.join(ANGULAR_DISTRIBUTION_CSV).is_file() {
        let _ = writeln!(
            out,
            "<p>Tables: <a href=\"../{ANGULAR_DISTRIBUTION_CSV}\">{ANGULAR_DISTRIBUTION_CSV}</a>, \
             <a href=\"../{ANGULAR_DISTRIBUTION_PARQUET}\">{ANGULAR_DISTRIBUTION_PARQUET}</a>.</p>"
        );
    }
    out.push_str("</section>\n");
    out
}

/// Each fit of the folder's `fits/` with its quality and parameter table.
fn fits_section(out_dir: &Path) -> String {
    let names: Vec<String> = crate::layout::fit_dirs(&out_dir.join(FITS_DIR))
        .iter()
        .filter_map(|d| d.file_name().map(|n| n.to_string_lossy().into_owned()))
        .filter(|n| is_folder_name(n))
        .collect();
    if names.is_empty() {
        return String::new();
    }
    let dir = out_dir.join(FITS_DIR);
    let mut out = String::from("<section id=\"fits\">\n<h2>Fits</h2>\n");
    for name in names {
        let file = dir.join(&name).join(FIT_JSON);
        let link = format!("<a href=\"../{FITS_DIR}/{0}/{FIT_JSON}\">{0}</a>", escape(&name));
        let fit: Option<serde_json::Value> =
            std::fs::read_to_string(&file).ok().and_then(|t| serde_json::from_str(&t).ok());
        let Some(fit) = fit else {
            let _ = writeln!(out, "<h3>{link}</h3>\n<p class=\"problem\">Its {FIT_JSON} cannot be read.</p>");
            continue;
        };
        out.push_str(&fit_block(&link, &fit));
    }
    out.push_str("</section>\n");
    out
}

/// One fit: its heading, a line on its quality and its parameter table.
fn fit_block(link: &str, fit: &serde_json::Value) -> String {
    let text = |k: &str| escape(fit[k].as_str().unwrap_or(""));
    let converged = fit["converged"].as_bool().unwrap_or(false);
    let mut out = format!("<h3>{link}: {} model, state {}</h3>\n", text("model"), text("state"));
    let _ = writeln!(
        out,
        "<p>{} · {} points · χ²/ν = {} · p = {}</p>",
        if converged { badge("ok", "converged") } else { badge("failed", "not converged") },
        fit["points"].as_u64().unwrap_or(0),
        number(fit["chi2_per_ndf"].as_f64(), 4),
        number(fit["p_value"].as_f64(), 3),
    );
    let rows: Vec<(String, Vec<Cell>)> = fit["parameters"]
        .as_array()
        .map(Vec::as_slice)
        .unwrap_or_default()
        .iter()
        .map(|p| {
            let at_bound = p["at_bound"].as_bool().unwrap_or(false);
            (
                if at_bound { "failed".to_string() } else { String::new() },
                vec![
                    Cell::text(p["name"].as_str().unwrap_or("")),
                    Cell::Number(number(p["value"].as_f64(), 5)),
                    Cell::Number(number(p["error"].as_f64(), 3)),
                    Cell::text(if at_bound { "at a bound" } else { "" }),
                ],
            )
        })
        .collect();
    out.push_str(&table(&["parameter", "value", "error", "note"], &rows));
    let minima = crate::plot::minima_of(fit);
    if minima.len() > 1 {
        if let Ok(svg) = crate::plot::draw_minima(&minima, Format::Svg) {
            out.push_str(&figure(
                &svg,
                "Every distinct minimum: χ² against the real depth and the real volume integral per nucleon pair; \
                 the best in brick red.",
            ));
        }
    }
    out
}

/// The table of every run.
fn runs_section(runs: &[RunEntry]) -> String {
    let rows: Vec<(String, Vec<Cell>)> = runs
        .iter()
        .map(|e| {
            let warnings = e.warnings.lines().filter(|l| !l.trim().is_empty()).count();
            (
                if e.status == RunStatus::Failed { "failed".to_string() } else { String::new() },
                vec![
                    Cell::Text(run_link(&e.run)),
                    Cell::Text(badge(e.status.as_str(), e.status.as_str())),
                    Cell::text(&e.processed_utc),
                    Cell::Number(number(e.charge_c.map(|q| q * 1e6), 5)),
                    Cell::Number(number(e.live_fraction, 4)),
                    Cell::Number(e.events.map_or_else(String::new, |n| n.to_string())),
                    Cell::Number(warnings.to_string()),
                ],
            )
        })
        .collect();
    format!(
        "<section id=\"runs\">\n<h2>Runs</h2>\n{}</section>\n",
        table(&["run", "status", "processed (UTC)", "charge (µC)", "live fraction", "events", "warnings"], &rows)
    )
}

#[cfg(test)]
mod tests;
