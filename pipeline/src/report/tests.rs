//! Checks of the report pages: what a person looks for is on them, and nothing is
//! rewritten that did not change.

use super::*;

/// An entry as the catalogue holds it.
fn entry(run: &str, status: RunStatus, charge_uc: f64) -> RunEntry {
    RunEntry {
        run: run.into(),
        record_file: format!("runs/{run}.yaml"),
        data_file: format!("runs/{run}.csv"),
        input_sha256: format!("hash-{run}"),
        config_sha256: "config".into(),
        status,
        error: if status == RunStatus::Failed { "runs/x.yaml: line 3: charge_c: <bad>".into() } else { String::new() },
        processed_utc: "2026-12-01T00:00:00Z".into(),
        seconds: 0.25,
        events: None,
        charge_c: Some(charge_uc * 1e-6),
        live_fraction: Some(0.95),
        warnings: String::new(),
    }
}

fn settings() -> Settings {
    Settings { title: "test <experiment>".into(), outlier_sigmas: 3.0, health_detector: None }
}

#[test]
fn the_index_lists_failed_runs_first_and_escapes_what_it_shows() {
    let dir = tempfile::tempdir().expect("temporary folder");
    let runs = [
        entry("0001", RunStatus::Ok, 10.0),
        entry("0002", RunStatus::Failed, 10.0),
        entry("0003", RunStatus::Skipped, 10.1),
    ];
    let written = write(dir.path(), &settings(), &runs).expect("written");
    assert_eq!(written, Written { run_pages: 3, run_pages_kept: 0 });
    let index = std::fs::read_to_string(dir.path().join("report/index.html")).expect("index");
    assert!(index.contains("3 run(s): 1 ok · 1 failed · 1 skipped"), "{index}");
    assert!(index.contains("test &lt;experiment&gt;") && !index.contains("<experiment>"));
    assert!(index.contains("line 3: charge_c: &lt;bad&gt;"));
    let failed = index.find("id=\"failed\"").expect("failed section");
    assert!(failed < index.find("id=\"health\"").expect("health section"));
    for run in ["0001", "0002", "0003"] {
        assert!(index.contains(&format!("href=\"runs/{run}.html\"")), "{run}");
        assert!(dir.path().join(format!("report/runs/{run}.html")).is_file(), "{run}");
    }
    // No script, no external resource (the SVG namespace URI is a name, not a fetch).
    assert!(!index.contains("<script") && !index.contains("src=") && !index.contains("href=\"http"));
}

#[test]
fn an_unchanged_run_keeps_its_page_and_a_changed_one_is_rewritten() {
    let dir = tempfile::tempdir().expect("temporary folder");
    let mut runs = vec![entry("0001", RunStatus::Ok, 10.0), entry("0002", RunStatus::Ok, 10.0)];
    write(dir.path(), &settings(), &runs).expect("written");
    assert_eq!(write(dir.path(), &settings(), &runs).expect("again"), Written { run_pages: 0, run_pages_kept: 2 });
    // The next batch finds them unchanged and marks them skipped: the pages stay.
    runs.iter_mut().for_each(|r| r.status = RunStatus::Skipped);
    assert_eq!(write(dir.path(), &settings(), &runs).expect("skipped"), Written { run_pages: 0, run_pages_kept: 2 });
    runs[1].input_sha256 = "changed".into();
    assert_eq!(write(dir.path(), &settings(), &runs).expect("changed"), Written { run_pages: 1, run_pages_kept: 1 });
    // Runs of `reduce` have no hash: their pages are always made anew.
    runs[0].input_sha256.clear();
    assert_eq!(write(dir.path(), &settings(), &runs).expect("reduce"), Written { run_pages: 1, run_pages_kept: 1 });
}

#[test]
fn the_health_section_names_the_outlying_run() {
    let dir = tempfile::tempdir().expect("temporary folder");
    let runs: Vec<RunEntry> = (1..=6)
        .map(|i| entry(&format!("000{i}"), RunStatus::Ok, if i == 5 { 1.0 } else { 10.0 + 0.1 * i as f64 }))
        .collect();
    write(dir.path(), &settings(), &runs).expect("written");
    let index = std::fs::read_to_string(dir.path().join("report/index.html")).expect("index");
    assert!(index.contains("More than 3 σ from the median: run 0005, charge (µC) = 1."), "{index}");
}

#[test]
fn run_ids_that_cannot_name_a_file_get_no_page() {
    let dir = tempfile::tempdir().expect("temporary folder");
    let runs = [entry("../escape", RunStatus::Failed, 1.0)];
    assert_eq!(write(dir.path(), &settings(), &runs).expect("written"), Written::default());
    let index = std::fs::read_to_string(dir.path().join("report/index.html")).expect("index");
    assert!(index.contains("../escape") && !index.contains("href=\"runs/../escape"));
}
