//! One run's page, `report/runs/<run>.html`: its status and error, its record, warnings
//! and event tallies, its cross sections, and each detector's spectrum with the gates.
//! The first line of the page names the catalogue entry it was made from; a page whose
//! entry did not change is kept as it is, so that a nightly rerun of 1000 unchanged runs
//! reads one line of each page and draws nothing.

use std::fmt::Write as _;
use std::path::Path;

use super::html::{badge, escape, figure, number, page, table, Cell};
use super::write_if_changed;
use crate::catalogue::RunEntry;
use crate::error::Diagnostic;
use crate::layout::{
    CROSS_SECTIONS_CSV, CROSS_SECTIONS_PARQUET, PID_PARQUET, PROVENANCE_JSON, RAW_JSON, SPECTRA_PARQUET,
};
use crate::plot::{Format, RunFigures};
use crate::provenance::sha256_hex;

/// The first line of a page made from `entry`: its fingerprint. Entries without an input
/// hash (runs of `reduce`, which keeps no catalogue) have none, and their page is always
/// made anew.
fn stamp(entry: &RunEntry) -> Option<String> {
    if entry.input_sha256.is_empty() {
        return None;
    }
    let json = serde_json::to_string(entry).ok()?;
    Some(format!("<!-- xsflow {} run page of {} -->", env!("CARGO_PKG_VERSION"), sha256_hex(json.as_bytes())))
}

/// Write the page of `entry` unless the page there was made from the same entry; true when
/// written. Also returns the run's health figures (for a run with outputs), kept beside
/// the page as `<run>.json` so that a kept page needs no table read.
///
/// # Errors
/// A page that cannot be written.
pub fn write(out_dir: &Path, runs_dir: &Path, entry: &RunEntry) -> Result<(bool, Option<RunFigures>), Diagnostic> {
    // A run left unchanged by a later batch (`skipped`) shows the processing that made its
    // outputs (`ok`), so its page and stamp stay as they were.
    let mut processed = entry.clone();
    if processed.status == crate::catalogue::RunStatus::Skipped {
        processed.status = crate::catalogue::RunStatus::Ok;
    }
    let entry = &processed;
    let path = runs_dir.join(format!("{}.html", entry.run));
    let figures_path = runs_dir.join(format!("{}.json", entry.run));
    let stamp = stamp(entry);
    if let Some(s) = &stamp {
        if second_line(&path).as_deref() == Some(s.as_str()) {
            if !entry.status.has_outputs() {
                return Ok((false, None));
            }
            // `null` there: the table could not be read when the page was made.
            let kept: Option<Option<RunFigures>> =
                std::fs::read(&figures_path).ok().and_then(|b| serde_json::from_slice(&b).ok());
            if let Some(kept) = kept {
                return Ok((false, kept));
            }
        }
    }
    let figures = entry
        .status
        .has_outputs()
        .then(|| crate::plot::run_figures(&out_dir.join(&entry.run).join(CROSS_SECTIONS_PARQUET)).ok())
        .flatten();
    if entry.status.has_outputs() {
        write_if_changed(&figures_path, &serde_json::to_vec(&figures).unwrap_or_default())?;
    }
    let html = render(out_dir, entry);
    // The stamp goes on the line after the doctype (which must come first).
    let html = match &stamp {
        Some(s) => html.replacen('\n', &format!("\n{s}\n"), 1),
        None => html,
    };
    write_if_changed(&path, html.as_bytes())?;
    Ok((true, figures))
}

/// The second line of a file (the stamp of a page), read without reading the rest.
fn second_line(path: &Path) -> Option<String> {
    use std::io::BufRead as _;
    let mut reader = std::io::BufReader::new(std::fs::File::open(path).ok()?);
    let mut line = String::new();
    for _ in 0..2 {
        line.clear();
        reader.read_line(&mut line).ok()?;
    }
    Some(line.trim_end().to_string())
}

/// The page's HTML.
fn render(out_dir: &Path, e: &RunEntry) -> String {
    let run_dir = out_dir.join(&e.run);
    let mut body = format!(
        "<header>\n<p><a href=\"../index.html\">← all runs</a></p>\n<h1>Run {} {}</h1>\n\
         <p class=\"meta\">Processed {}.</p>\n</header>\n",
        escape(&e.run),
        badge(e.status.as_str(), e.status.as_str()),
        escape(&e.processed_utc),
    );
    if !e.error.is_empty() {
        let _ = writeln!(
            body,
            "<section><h2>Error</h2>\n<div class=\"problem\"><pre>{}</pre></div></section>",
            escape(&e.error)
        );
    }
    let facts = [
        ("record file", Cell::text(&e.record_file)),
        ("data file", Cell::text(&e.data_file)),
        ("charge (µC)", Cell::Text(number(e.charge_c.map(|q| q * 1e6), 6))),
        ("mean live fraction", Cell::Text(number(e.live_fraction, 5))),
        ("events read", Cell::Text(e.events.map_or_else(String::new, |n| n.to_string()))),
    ];
    let rows: Vec<(String, Vec<Cell>)> =
        facts.into_iter().map(|(k, v)| (String::new(), vec![Cell::text(k), v])).collect();
    let _ = write!(body, "<section><h2>Record</h2>\n{}", table(&["", "value"], &rows));
    if run_dir.join(CROSS_SECTIONS_CSV).is_file() {
        let _ = writeln!(
            body,
            "<p>Tables: <a href=\"../../{0}/{CROSS_SECTIONS_CSV}\">{CROSS_SECTIONS_CSV}</a>, \
             <a href=\"../../{0}/{PROVENANCE_JSON}\">{PROVENANCE_JSON}</a>.</p>",
            escape(&e.run)
        );
    }
    body.push_str("</section>\n");
    let warnings: Vec<&str> = e.warnings.lines().filter(|l| !l.trim().is_empty()).collect();
    if !warnings.is_empty() {
        body.push_str("<section><h2>Warnings</h2>\n<ul>\n");
        for w in warnings {
            let _ = writeln!(body, "<li>{}</li>", escape(w));
        }
        body.push_str("</ul></section>\n");
    }
    if e.status.has_outputs() {
        body.push_str(&tallies(&run_dir));
        body.push_str(&cross_sections(&run_dir));
        body.push_str(&spectra(&run_dir));
    }
    page(&format!("Run {}", e.run), &body)
}

/// The event tallies of a list-mode run (raw.json), or nothing.
fn tallies(run_dir: &Path) -> String {
    let Some(raw) = std::fs::read_to_string(run_dir.join(RAW_JSON))
        .ok()
        .and_then(|t| serde_json::from_str::<serde_json::Value>(&t).ok())
    else {
        return String::new();
    };
    let Some(tally) = raw["tally"].as_object() else {
        return String::new();
    };
    let rows: Vec<(String, Vec<Cell>)> = tally
        .iter()
        .map(|(k, v)| (String::new(), vec![Cell::text(&k.replace('_', " ")), Cell::Number(escape(&v.to_string()))]))
        .collect();
    let reconciled = if raw["reconciled"].as_bool() == Some(true) {
        "<p>Every event is counted once (the tallies add up).</p>\n"
    } else {
        "<p class=\"problem\">The tallies do not add up to the events read.</p>\n"
    };
    format!("<section><h2>Event tallies</h2>\n{}{reconciled}</section>\n", table(&["", "events"], &rows))
}

/// The run's cross sections, one row per detector and state.
fn cross_sections(run_dir: &Path) -> String {
    let file = run_dir.join(CROSS_SECTIONS_PARQUET);
    let read = || -> Result<Vec<(String, Vec<Cell>)>, Diagnostic> {
        let t = crate::tables::read_table(&file).map_err(|e| Diagnostic::new(&file, "", e.to_string()))?;
        let text = |n: &str| stages::table::str_values(&t, n).map_err(|e| Diagnostic::new(&file, n, e.to_string()));
        let nums = |n: &str| stages::table::f64_values(&t, n).map_err(|e| Diagnostic::new(&file, n, e.to_string()));
        let (detector, state) = (text("detector")?, text("state")?);
        let (theta_lab, net, net_err) = (nums("theta_lab_deg")?, nums("counts_net")?, nums("counts_net_err")?);
        // Tables reduced without the CM stage lack these; they show empty.
        let optional = |n: &str| nums(n).unwrap_or_else(|_| vec![f64::NAN; detector.len()]);
        let (theta_cm, dsdo, stat) = (optional("theta_cm_deg"), optional("dsdo_cm_mb_sr"), optional("stat_err_mb_sr"));
        Ok((0..detector.len())
            .map(|i| {
                let n = |v: f64, d: usize| Cell::Number(number(Some(v), d));
                (
                    String::new(),
                    vec![
                        Cell::text(&detector[i]),
                        Cell::text(&state[i]),
                        n(theta_lab[i], 4),
                        n(theta_cm[i], 4),
                        n(net[i], 6),
                        n(net_err[i], 3),
                        n(dsdo[i], 5),
                        n(stat[i], 3),
                    ],
                )
            })
            .collect())
    };
    let content = match read() {
        Ok(rows) => table(
            &[
                "detector",
                "state",
                "θ_lab (deg)",
                "θ_cm (deg)",
                "net counts",
                "± counts",
                "dσ/dΩ_cm (mb/sr)",
                "± stat (mb/sr)",
            ],
            &rows,
        ),
        Err(d) => format!("<p class=\"problem\">Cannot show them: {}</p>\n", escape(&d.to_string())),
    };
    format!("<section><h2>Cross sections</h2>\n{content}</section>\n")
}

/// Each detector's spectrum with its gates (runs reduced from events or spectra), then
/// each telescope's ΔE–E histogram with its polygon (runs with PID).
fn spectra(run_dir: &Path) -> String {
    let mut out = String::new();
    let kinds: [(&str, &str, PlotOf, &str); 2] = [
        (SPECTRA_PARQUET, "Spectra", crate::plot::spectrum, "counts per channel, windows and side bands shaded"),
        (PID_PARQUET, "Particle identification", crate::plot::pid, "ΔE against E, shade by log counts, PID polygon"),
    ];
    for (name, heading, draw, caption) in kinds {
        let file = run_dir.join(name);
        if !file.is_file() {
            continue;
        }
        let detectors = crate::tables::read_table(&file)
            .ok()
            .and_then(|t| stages::table::str_values(&t, "detector").ok())
            .map(|d| crate::plot::distinct(&d))
            .unwrap_or_default();
        let _ = writeln!(out, "<section><h2>{heading}</h2>");
        for d in detectors {
            match draw(&file, Some(&d), Format::Svg) {
                Ok(svg) => out.push_str(&figure(&svg, &format!("Detector {d}: {caption}."))),
                Err(e) => {
                    let _ = writeln!(
                        out,
                        "<p class=\"problem\">Detector {}: not drawn: {}</p>",
                        escape(&d),
                        escape(&e.message)
                    );
                }
            }
        }
        out.push_str("</section>\n");
    }
    out
}

/// A per-detector plot of a run's table.
type PlotOf = fn(&Path, Option<&str>, Format) -> Result<Vec<u8>, Diagnostic>;
