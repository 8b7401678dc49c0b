//! `xsflow batch` and `xsflow runs`: incremental processing with a run catalogue, failed
//! runs kept apart and picked up again, shards that split the runs the same way every time,
//! and a catalogue from a newer version refused.

use std::path::Path;

use crate::common::{demo_copy, demo_dir, edit, text, xsflow};

fn batch(dir: &Path, extra: &[&str]) -> std::process::Output {
    let mut args = vec!["batch", "experiment.yaml", "--out", "out"];
    args.extend(extra);
    xsflow(dir, &args)
}

fn summary_line(out: &std::process::Output) -> String {
    text(out).lines().find(|l| l.starts_with("batch:")).unwrap_or_default().to_string()
}

#[test]
fn second_batch_skips_unchanged_runs_and_a_change_reprocesses_exactly_its_runs() {
    let tmp = demo_copy();
    let first = batch(tmp.path(), &["--jobs", "2"]);
    assert_eq!(first.status.code(), Some(0), "{}", text(&first));
    assert!(summary_line(&first).starts_with("batch: 3 ok, 0 failed, 0 skipped"), "{}", text(&first));
    // The same bytes as `xsflow reduce` writes.
    for run in ["0101", "0102", "0103"] {
        let got = std::fs::read_to_string(tmp.path().join("out").join(run).join("cross_sections.csv")).expect("csv");
        let want =
            std::fs::read_to_string(demo_dir().join("expected").join(run).join("cross_sections.csv")).expect("csv");
        assert_eq!(got, want, "{run}");
    }
    assert!(tmp.path().join("out/fits/elastic_optical/fit.json").is_file());
    let second = batch(tmp.path(), &[]);
    assert!(summary_line(&second).starts_with("batch: 0 ok, 0 failed, 3 skipped"), "{}", text(&second));
    // One yields file changes: that run only.
    edit(&tmp.path().join("runs/run0102.yields.csv"), "D01,elastic,", "D01,elastic,1");
    let third = batch(tmp.path(), &[]);
    assert!(summary_line(&third).starts_with("batch: 1 ok, 0 failed, 2 skipped"), "{}", text(&third));
    // A stage setting changes: every run; a fit entry does not change any run.
    edit(&tmp.path().join("experiment.yaml"), "charge_rel_err: 0.01", "charge_rel_err: 0.02");
    let fourth = batch(tmp.path(), &[]);
    assert!(summary_line(&fourth).starts_with("batch: 3 ok, 0 failed, 0 skipped"), "{}", text(&fourth));
    edit(&tmp.path().join("experiment.yaml"), "name: inelastic_legendre", "name: inelastic_series");
    let fifth = batch(tmp.path(), &["--dry-run"]);
    assert!(summary_line(&fifth).starts_with("batch: 0 would be processed, 0 failed, 3 skipped"), "{}", text(&fifth));
}

#[test]
fn a_failed_run_is_catalogued_with_its_reason_and_picked_up_once_fixed() {
    let tmp = demo_copy();
    edit(&tmp.path().join("runs/run0103.yields.csv"), "D01,elastic,", "D01,elastic,-");
    let out = batch(tmp.path(), &[]);
    assert_eq!(out.status.code(), Some(1), "{}", text(&out));
    assert!(summary_line(&out).starts_with("batch: 2 ok, 1 failed, 0 skipped"), "{}", text(&out));
    let list = xsflow(tmp.path(), &["runs", "out", "--failed", "--format", "json"]);
    let failed: serde_json::Value = serde_json::from_slice(&list.stdout).expect("json");
    assert_eq!(failed.as_array().map(Vec::len), Some(1), "{failed}");
    assert_eq!(failed[0]["run"], "0103");
    assert!(failed[0]["error"].as_str().is_some_and(|e| e.contains("expected a count >= 0")), "{failed}");
    edit(&tmp.path().join("runs/run0103.yields.csv"), "D01,elastic,-", "D01,elastic,");
    let again = batch(tmp.path(), &[]);
    assert_eq!(again.status.code(), Some(0), "{}", text(&again));
    assert!(summary_line(&again).starts_with("batch: 1 ok, 0 failed, 2 skipped"), "{}", text(&again));
    let all: serde_json::Value =
        serde_json::from_slice(&xsflow(tmp.path(), &["runs", "out", "--format", "json"]).stdout).expect("json");
    assert!(all.as_array().expect("runs").iter().all(|r| r["status"] == "ok"), "{all}");
}

#[test]
fn shards_split_the_runs_disjointly_and_the_same_way_every_time() {
    let tmp = demo_copy();
    let mut seen = Vec::new();
    for k in 1..=2 {
        let shard = format!("{k}/2");
        let out = xsflow(tmp.path(), &["batch", "experiment.yaml", "--out", &format!("out{k}"), "--shard", &shard]);
        assert_eq!(out.status.code(), Some(0), "{}", text(&out));
        for run in ["0101", "0102", "0103"] {
            if tmp.path().join(format!("out{k}")).join(run).is_dir() {
                seen.push(run);
            }
        }
    }
    seen.sort_unstable();
    assert_eq!(seen, ["0101", "0102", "0103"], "every run in exactly one shard");
    // The split is a fixed function of the run id, the same on every machine: the first 8
    // bytes of SHA-256(id) modulo N, plus 1; these values were computed with Python's
    // hashlib (int(sha256(id).hexdigest()[:16], 16) % N + 1).
    for (run, of_2, of_3) in [("0101", 1, 2), ("0102", 2, 1), ("0103", 1, 1)] {
        assert_eq!((xsflow::batch::shard_of(run, 2), xsflow::batch::shard_of(run, 3)), (of_2, of_3), "{run}");
        assert!(tmp.path().join(format!("out{of_2}")).join(run).is_dir());
    }
    assert_eq!(batch(tmp.path(), &["--shard", "3/2"]).status.code(), Some(2));
}

#[test]
fn a_catalogue_from_a_newer_version_is_refused() {
    let tmp = demo_copy();
    assert_eq!(batch(tmp.path(), &[]).status.code(), Some(0));
    xsflow::catalogue::Catalogue::open(&tmp.path().join("out")).expect("open").set_version(99).expect("set");
    let out = batch(tmp.path(), &[]);
    let msg = text(&out);
    assert_eq!(out.status.code(), Some(2), "{msg}");
    assert!(msg.contains("written by a newer xsflow (catalogue version 99; this one reads 1)"), "{msg}");
}

#[test]
fn three_shards_merged_give_what_one_batch_gives() {
    let tmp = demo_copy();
    assert_eq!(batch(tmp.path(), &[]).status.code(), Some(0));
    let mut dirs = Vec::new();
    for k in 1..=3 {
        let dir = format!("shard{k}");
        let out = xsflow(tmp.path(), &["batch", "experiment.yaml", "--out", &dir, "--shard", &format!("{k}/3")]);
        assert_eq!(out.status.code(), Some(0), "{}", text(&out));
        dirs.push(dir);
    }
    let mut args = vec!["merge"];
    args.extend(dirs.iter().map(String::as_str));
    args.extend(["--out", "merged"]);
    let out = xsflow(tmp.path(), &args);
    assert_eq!(out.status.code(), Some(0), "{}", text(&out));
    let single = crate::common::files_below(&tmp.path().join("out"));
    let merged = crate::common::files_below(&tmp.path().join("merged"));
    let rel = |files: &[std::path::PathBuf], base: &str| -> Vec<String> {
        files
            .iter()
            .map(|f| f.strip_prefix(tmp.path().join(base)).expect("below").to_string_lossy().into_owned())
            .filter(|f| f != xsflow::catalogue::CATALOGUE_FILE)
            .collect()
    };
    assert_eq!(rel(&single, "out"), rel(&merged, "merged"));
    for f in rel(&single, "out") {
        let (a, b) =
            (std::fs::read(tmp.path().join("out").join(&f)), std::fs::read(tmp.path().join("merged").join(&f)));
        assert!(a.expect("a") == b.expect("b"), "{f} differs between one batch and three merged shards");
    }
    // Shards of different N are refused.
    let other = xsflow(tmp.path(), &["batch", "experiment.yaml", "--out", "half", "--shard", "1/2"]);
    assert_eq!(other.status.code(), Some(0));
    let bad = xsflow(tmp.path(), &["merge", "shard1", "half", "--out", "mixed"]);
    let msg = text(&bad);
    assert_eq!(bad.status.code(), Some(2), "{msg}");
    assert!(msg.contains("inconsistent N"), "{msg}");
}

#[test]
fn a_batch_killed_at_any_moment_and_rerun_gives_the_uninterrupted_outputs() {
    // 43 runs (the demo's three and 40 more records of the same yields); SIGKILL after
    // 20, 60, 150, 300 and 500 ms, a rerun after each kill, then one to completion: every
    // output byte-identical to an uninterrupted batch, no temporary file left, and a
    // catalogue with every run ok.
    let tmp = demo_copy();
    for i in 0..40 {
        let src = ["0101", "0102", "0103"][i % 3];
        let record = std::fs::read_to_string(tmp.path().join(format!("runs/run{src}.run.yaml"))).expect("record");
        let record = record.replace(&format!("run: \"{src}\""), &format!("run: \"k{i:03}\""));
        std::fs::write(tmp.path().join(format!("runs/k{i:03}.run.yaml")), record).expect("write");
    }
    assert_eq!(xsflow(tmp.path(), &["batch", "experiment.yaml", "--out", "ref"]).status.code(), Some(0));
    for delay_ms in [20u64, 60, 150, 300, 500] {
        let mut child = std::process::Command::new(env!("CARGO_BIN_EXE_xsflow"))
            .args(["batch", "experiment.yaml", "--out", "out", "--jobs", "2", "-q"])
            .current_dir(tmp.path())
            .env("SOURCE_DATE_EPOCH", "1764633600")
            .stderr(std::process::Stdio::null())
            .spawn()
            .expect("spawn");
        std::thread::sleep(std::time::Duration::from_millis(delay_ms));
        let _ = child.kill();
        let _ = child.wait();
    }
    let last = batch(tmp.path(), &[]);
    assert_eq!(last.status.code(), Some(0), "{}", text(&last));
    let files = |base: &str| -> Vec<String> {
        crate::common::files_below(&tmp.path().join(base))
            .iter()
            .map(|f| f.strip_prefix(tmp.path().join(base)).expect("below").to_string_lossy().into_owned())
            .filter(|f| !f.starts_with(xsflow::catalogue::CATALOGUE_FILE))
            .collect()
    };
    let (a, b) = (files("ref"), files("out"));
    assert_eq!(a, b, "the same files, and no temporary ones");
    for f in &a {
        let same = std::fs::read(tmp.path().join("ref").join(f)).expect("ref")
            == std::fs::read(tmp.path().join("out").join(f)).expect("out");
        assert!(same, "{f} differs after the kills");
    }
    let all: serde_json::Value =
        serde_json::from_slice(&xsflow(tmp.path(), &["runs", "out", "--format", "json"]).stdout).expect("json");
    let runs = all.as_array().expect("runs");
    assert_eq!(runs.len(), 43);
    assert!(runs.iter().all(|r| r["status"] == "ok"), "{all}");
}

#[test]
fn a_run_pattern_that_matches_nothing_is_a_warning_for_a_batch() {
    let tmp = demo_copy();
    edit(&tmp.path().join("experiment.yaml"), "  - runs/*.run.yaml", "  - runs/*.run.yaml\n  - tonight/*.run.yaml");
    let out = batch(tmp.path(), &[]);
    let msg = text(&out);
    assert_eq!(out.status.code(), Some(0), "{msg}");
    assert!(msg.contains("runs[1] matches no run record"), "{msg}");
    // `reduce` and `check` still call it an error.
    assert_eq!(xsflow(tmp.path(), &["check", "experiment.yaml"]).status.code(), Some(2));
}
