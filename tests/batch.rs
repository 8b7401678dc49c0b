//! `xsflow batch` and `xsflow runs`: incremental processing with a run catalogue, failed
//! runs kept apart and picked up again, shards that split the runs the same way every time,
//! and a catalogue from a newer version refused.

use std::path::Path;

use crate::common::{demo_copy, demo_dir, edit, text, xsflow, xsflow_with_env};

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
    assert!(summary_line(&first).starts_with("batch: 4 ok, 0 failed, 0 skipped"), "{}", text(&first));
    // The same bytes as `xsflow reduce` writes.
    for run in ["0101", "0102", "0103"] {
        let got = std::fs::read_to_string(tmp.path().join("out").join(run).join("cross_sections.csv")).expect("csv");
        let want =
            std::fs::read_to_string(demo_dir().join("expected").join(run).join("cross_sections.csv")).expect("csv");
        assert_eq!(got, want, "{run}");
    }
    assert!(tmp.path().join("out/fits/elastic_optical/fit.json").is_file());
    let second = batch(tmp.path(), &[]);
    assert!(summary_line(&second).starts_with("batch: 0 ok, 0 failed, 4 skipped"), "{}", text(&second));
    // One yields file changes: that run only.
    edit(&tmp.path().join("runs/run0102.yields.csv"), "D01,elastic,", "D01,elastic,1");
    let third = batch(tmp.path(), &[]);
    assert!(summary_line(&third).starts_with("batch: 1 ok, 0 failed, 3 skipped"), "{}", text(&third));
    // A stage setting changes: every run; a fit entry does not change any run.
    edit(&tmp.path().join("experiment.yaml"), "charge_rel_err: 0.01", "charge_rel_err: 0.02");
    let fourth = batch(tmp.path(), &[]);
    assert!(summary_line(&fourth).starts_with("batch: 4 ok, 0 failed, 0 skipped"), "{}", text(&fourth));
    edit(&tmp.path().join("experiment.yaml"), "name: inelastic_legendre", "name: inelastic_series");
    let fifth = batch(tmp.path(), &["--dry-run"]);
    assert!(summary_line(&fifth).starts_with("batch: 0 would be processed, 0 failed, 4 skipped"), "{}", text(&fifth));
}

#[test]
fn a_failed_run_is_catalogued_with_its_reason_and_picked_up_once_fixed() {
    let tmp = demo_copy();
    edit(&tmp.path().join("runs/run0103.yields.csv"), "D01,elastic,", "D01,elastic,-");
    let out = batch(tmp.path(), &[]);
    assert_eq!(out.status.code(), Some(1), "{}", text(&out));
    assert!(summary_line(&out).starts_with("batch: 3 ok, 1 failed, 0 skipped"), "{}", text(&out));
    let list = xsflow(tmp.path(), &["runs", "out", "--failed", "--format", "json"]);
    let failed: serde_json::Value = serde_json::from_slice(&list.stdout).expect("json");
    assert_eq!(failed.as_array().map(Vec::len), Some(1), "{failed}");
    assert_eq!(failed[0]["run"], "0103");
    assert!(failed[0]["error"].as_str().is_some_and(|e| e.contains("expected a count >= 0")), "{failed}");
    edit(&tmp.path().join("runs/run0103.yields.csv"), "D01,elastic,-", "D01,elastic,");
    let again = batch(tmp.path(), &[]);
    assert_eq!(again.status.code(), Some(0), "{}", text(&again));
    assert!(summary_line(&again).starts_with("batch: 1 ok, 0 failed, 3 skipped"), "{}", text(&again));
    // The catalogue says what this batch did: 0103 processed, the others unchanged.
    let all: serde_json::Value =
        serde_json::from_slice(&xsflow(tmp.path(), &["runs", "out", "--format", "json"]).stdout).expect("json");
    let status: Vec<(&str, &str)> = all
        .as_array()
        .expect("runs")
        .iter()
        .map(|r| (r["run"].as_str().unwrap_or_default(), r["status"].as_str().unwrap_or_default()))
        .collect();
    assert_eq!(status, [("0101", "skipped"), ("0102", "skipped"), ("0103", "ok"), ("0104", "skipped")], "{all}");
}

/// Issue 11, defect 1: a panic inside one run (a peak fit with more parameters than the
/// dual numbers held) stopped the whole batch. A debug build panics on purpose in the run
/// named by XSFLOW_TEST_PANIC_RUN; that run fails with the message, the others finish.
#[test]
fn issue_11_a_panic_in_one_run_fails_that_run_and_the_others_finish() {
    let tmp = demo_copy();
    let args = ["batch", "experiment.yaml", "--out", "out", "--jobs", "2"];
    let out = xsflow_with_env(tmp.path(), &args, &[("XSFLOW_TEST_PANIC_RUN", "0102")]);
    assert_eq!(out.status.code(), Some(1), "{}", text(&out));
    assert!(summary_line(&out).starts_with("batch: 3 ok, 1 failed, 0 skipped"), "{}", text(&out));
    let list = xsflow(tmp.path(), &["runs", "out", "--failed", "--format", "json"]);
    let failed: serde_json::Value = serde_json::from_slice(&list.stdout).expect("json");
    assert_eq!(failed[0]["run"], "0102", "{failed}");
    assert!(failed[0]["error"].as_str().is_some_and(|e| e.contains("internal error")), "{failed}");
    for run in ["0101", "0103", "0104"] {
        assert!(tmp.path().join("out").join(run).join("cross_sections.csv").is_file(), "{run}");
    }
    assert!(!tmp.path().join("out/0102").exists(), "the panicked run wrote outputs");
    // `reduce` likewise goes on with the other runs.
    let reduce = xsflow_with_env(
        tmp.path(),
        &["reduce", "experiment.yaml", "--out", "again"],
        &[("XSFLOW_TEST_PANIC_RUN", "0101")],
    );
    assert_eq!(reduce.status.code(), Some(1), "{}", text(&reduce));
    assert!(text(&reduce).contains("3 run(s) reduced, 1 failed"), "{}", text(&reduce));
}

/// Issue 11: `runs --format csv` had its own writer, which turned quotes into apostrophes
/// and joined lines; through the one CSV writer the error reads back whole.
#[test]
fn issue_11_the_csv_run_list_keeps_errors_with_quotes_and_lines_whole() {
    let tmp = demo_copy();
    let yields = tmp.path().join("runs/run0103.yields.csv");
    edit(&yields, "D01,elastic,", "D01,elastic,-");
    edit(&yields, "D02,elastic,", "\"D9\"\"9\",elastic,");
    assert_eq!(batch(tmp.path(), &[]).status.code(), Some(1));
    let json = xsflow(tmp.path(), &["runs", "out", "--failed", "--format", "json"]);
    let failed: serde_json::Value = serde_json::from_slice(&json.stdout).expect("json");
    let error = failed[0]["error"].as_str().expect("an error");
    assert!(error.contains('"') && error.contains('\n'), "the case needs a quote and a line break: {error}");
    let csv = xsflow(tmp.path(), &["runs", "out", "--failed", "--format", "csv"]);
    std::fs::write(tmp.path().join("runs.csv"), &csv.stdout).expect("write");
    let table = xsflow::tables::read_table(&tmp.path().join("runs.csv")).expect("the CSV list parses");
    let errors = stages::table::str_values(&table, "error").expect("error column");
    assert_eq!(errors, [error], "{}", text(&csv));
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
    assert_same_outputs(tmp.path(), "out", "merged");
    // Shards of different N are refused.
    let other = xsflow(tmp.path(), &["batch", "experiment.yaml", "--out", "half", "--shard", "1/2"]);
    assert_eq!(other.status.code(), Some(0));
    let bad = xsflow(tmp.path(), &["merge", "shard1", "half", "--out", "mixed"]);
    let msg = text(&bad);
    assert_eq!(bad.status.code(), Some(2), "{msg}");
    assert!(msg.contains("inconsistent N"), "{msg}");
}

/// Issue 11: a run whose outputs cannot be read back was counted twice, once as failed and
/// once as it was counted before (ok when copied by a merge, skipped by a batch).
#[test]
fn issue_11_a_merged_run_whose_outputs_cannot_be_read_back_counts_once_as_failed() {
    let tmp = demo_copy();
    for k in 1..=2 {
        let out =
            xsflow(tmp.path(), &["batch", "experiment.yaml", "--out", &format!("s{k}"), "--shard", &format!("{k}/2")]);
        assert_eq!(out.status.code(), Some(0), "{}", text(&out));
    }
    let lost = ["s1", "s2"]
        .iter()
        .map(|s| tmp.path().join(s).join("0102/provenance.json"))
        .find(|p| p.is_file())
        .expect("one shard holds run 0102");
    std::fs::remove_file(&lost).expect("remove");
    let out = xsflow(tmp.path(), &["merge", "s1", "s2", "--out", "merged"]);
    let msg = text(&out);
    assert_eq!(out.status.code(), Some(1), "{msg}");
    let line = msg.lines().find(|l| l.starts_with("merge:")).unwrap_or_default();
    assert!(line.starts_with("merge: 3 run(s) ok, 1 failed;"), "four runs, each counted once: {msg}");
    assert!(msg.contains("merged/0102/provenance.json cannot read the run's provenance record"), "{msg}");
}

/// The demo with `extra` more run records (`k000`, ...) that reuse its three yields tables.
fn demo_with_more_runs(extra: usize) -> tempfile::TempDir {
    let tmp = demo_copy();
    for i in 0..extra {
        let src = ["0101", "0102", "0103"][i % 3];
        let record = std::fs::read_to_string(tmp.path().join(format!("runs/run{src}.run.yaml"))).expect("record");
        let record = record.replace(&format!("run: \"{src}\""), &format!("run: \"k{i:03}\""));
        std::fs::write(tmp.path().join(format!("runs/k{i:03}.run.yaml")), record).expect("write");
    }
    tmp
}

/// The files below `base` in `dir` (the catalogue aside), relative, sorted.
fn output_files(dir: &Path, base: &str) -> Vec<String> {
    crate::common::files_below(&dir.join(base))
        .iter()
        .map(|f| f.strip_prefix(dir.join(base)).expect("below").to_string_lossy().into_owned())
        .filter(|f| !f.starts_with(xsflow::catalogue::CATALOGUE_FILE) && !f.starts_with(REPORT))
        .collect()
}

/// The report folder: it shows what each batch did (a run processed now is `ok`, one left
/// unchanged is `skipped`), so two batches that give the same results may show it
/// differently; the results are the tables.
const REPORT: &str = xsflow::layout::REPORT_DIR;

/// Assert that two output folders hold the same files with the same bytes (catalogue and
/// report aside).
fn assert_same_outputs(dir: &Path, a: &str, b: &str) {
    let (files_a, files_b) = (output_files(dir, a), output_files(dir, b));
    assert_eq!(files_a, files_b, "the same files, and no temporary ones");
    for f in &files_a {
        let same = std::fs::read(dir.join(a).join(f)).expect("a") == std::fs::read(dir.join(b).join(f)).expect("b");
        assert!(same, "{f} differs between {a} and {b}");
    }
}

#[test]
fn two_batches_started_at_once_on_one_output_folder_leave_it_whole() {
    // A second batch started by mistake while the first runs: both finish, the catalogue
    // passes SQLite's integrity check and lists every run once, and the outputs are those
    // of one batch.
    let tmp = demo_with_more_runs(40);
    assert_eq!(xsflow(tmp.path(), &["batch", "experiment.yaml", "--out", "ref"]).status.code(), Some(0));
    let spawn = || {
        std::process::Command::new(env!("CARGO_BIN_EXE_xsflow"))
            .args(["batch", "experiment.yaml", "--out", "out", "--jobs", "2", "-q"])
            .current_dir(tmp.path())
            .env("SOURCE_DATE_EPOCH", "1764633600")
            .stderr(std::process::Stdio::piped())
            .spawn()
            .expect("spawn")
    };
    let (first, second) = (spawn(), spawn());
    for child in [first, second] {
        let out = child.wait_with_output().expect("wait");
        assert_eq!(out.status.code(), Some(0), "{}", String::from_utf8_lossy(&out.stderr));
    }
    assert_same_outputs(tmp.path(), "ref", "out");
    let db = rusqlite::Connection::open(tmp.path().join("out").join(xsflow::catalogue::CATALOGUE_FILE)).expect("db");
    let check: String = db.query_row("PRAGMA integrity_check", [], |r| r.get(0)).expect("integrity check");
    assert_eq!(check, "ok");
    let runs = xsflow::catalogue::Catalogue::open(&tmp.path().join("out")).expect("open").list(false).expect("list");
    assert_eq!(runs.len(), 44);
    assert!(runs.iter().all(|r| r.status.has_outputs()), "{runs:?}");
}

#[test]
fn a_batch_killed_at_any_moment_and_rerun_gives_the_uninterrupted_outputs() {
    // 44 runs (the demo's four and 40 more records of the same yields); SIGKILL after
    // 20, 60, 150, 300 and 500 ms, a rerun after each kill, then one to completion: every
    // output byte-identical to an uninterrupted batch, no temporary file left, and a
    // catalogue with every run ok.
    let tmp = demo_with_more_runs(40);
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
    assert_same_outputs(tmp.path(), "ref", "out");
    let all: serde_json::Value =
        serde_json::from_slice(&xsflow(tmp.path(), &["runs", "out", "--format", "json"]).stdout).expect("json");
    let runs = all.as_array().expect("runs");
    assert_eq!(runs.len(), 44);
    assert!(runs.iter().all(|r| r["status"] == "ok" || r["status"] == "skipped"), "{all}");
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

#[test]
fn a_run_file_that_changes_or_disappears_during_the_batch_fails_that_run_and_a_rerun_picks_it_up() {
    // The batch hashes every run's files when it decides what to do, and reads them later.
    // Here the hashes are taken first (as the batch's change check does), then, before the
    // batch reads them: run 0101's yields table is rewritten, run 0102's record and run
    // 0103's yields table are deleted. Run 0104 and a fifth run (0105, a copy of 0101) stay as
    // they were.
    let tmp = demo_copy();
    let runs = tmp.path().join("runs");
    std::fs::copy(runs.join("run0101.yields.csv"), runs.join("run0105.yields.csv")).expect("copy");
    let record = std::fs::read_to_string(runs.join("run0101.run.yaml")).expect("record");
    std::fs::write(runs.join("run0105.run.yaml"), record.replace("0101", "0105")).expect("write");
    let plan = xsflow::plan::plan_with(&tmp.path().join("experiment.yaml"), true).expect("the demo plans");
    for run in &plan.runs {
        run.loaded.as_ref().expect("loads").data_hash().expect("hashed");
    }
    let yields_0101 = runs.join("run0101.yields.csv");
    let original_0101 = std::fs::read(&yields_0101).expect("read");
    edit(&yields_0101, "D01,elastic,", "D01,elastic,1");
    let record_0102 = std::fs::read(runs.join("run0102.run.yaml")).expect("read");
    std::fs::remove_file(runs.join("run0102.run.yaml")).expect("remove");
    let yields_0103 = std::fs::read(runs.join("run0103.yields.csv")).expect("read");
    std::fs::remove_file(runs.join("run0103.yields.csv")).expect("remove");
    let opts =
        xsflow::batch::BatchOptions { out: tmp.path().join("out"), jobs: 2, shard: None, force: false, dry_run: false };
    let (summary, failures, _) = xsflow::batch::batch(&plan, &opts).expect("the batch runs");
    assert_eq!((summary.ok, summary.failed), (2, 3), "{failures:?}");
    let reason =
        |run: &str| failures.iter().find(|f| f.run == run).map(|f| f.problems[0].to_string()).unwrap_or_default();
    assert!(
        reason("0101")
            .contains("run0101.yields.csv the file changed after the run's inputs were read and hashed (size"),
        "{}",
        reason("0101")
    );
    assert!(
        reason("0102").contains("run0102.run.yaml the file disappeared after the run's inputs were read and hashed"),
        "{}",
        reason("0102")
    );
    assert!(
        reason("0103").contains("run0103.yields.csv the file disappeared after the run's inputs were read and hashed"),
        "{}",
        reason("0103")
    );
    for run in ["0101", "0102", "0103"] {
        assert!(!tmp.path().join("out").join(run).exists(), "nothing of {run} is written");
    }
    let list: serde_json::Value =
        serde_json::from_slice(&xsflow(tmp.path(), &["runs", "out", "--failed", "--format", "json"]).stdout)
            .expect("json");
    assert_eq!(list.as_array().map(Vec::len), Some(3), "{list}");
    // The files come back as they were: the next batch processes exactly the three runs,
    // and gives what an undisturbed reduction gives.
    std::fs::write(&yields_0101, original_0101).expect("restore");
    std::fs::write(runs.join("run0102.run.yaml"), record_0102).expect("restore");
    std::fs::write(runs.join("run0103.yields.csv"), yields_0103).expect("restore");
    let again = batch(tmp.path(), &[]);
    assert_eq!(again.status.code(), Some(0), "{}", text(&again));
    assert!(summary_line(&again).starts_with("batch: 3 ok, 0 failed, 2 skipped"), "{}", text(&again));
    for run in ["0101", "0102", "0103"] {
        let got = std::fs::read(tmp.path().join("out").join(run).join("cross_sections.csv")).expect("csv");
        let want = std::fs::read(demo_dir().join("expected").join(run).join("cross_sections.csv")).expect("csv");
        assert!(got == want, "{run} differs from the expected demo output");
    }
}

/// A small file system of its own (a tmpfs of a given size) mounted on a folder, in a new
/// user and mount namespace held by a shell (`unshare` from util-linux); commands run in
/// that shell see the small file system, and this process reads it through
/// `/proc/PID/root`. Nothing here needs root, and nothing can fill the real disk.
struct SmallDisk {
    shell: std::process::Child,
    input: std::process::ChildStdin,
    output: std::io::BufReader<std::process::ChildStdout>,
    mount: std::path::PathBuf,
}

impl SmallDisk {
    /// Mount a tmpfs of `size_kib` on `mount`; the shell's commands run in `mount`'s parent.
    fn mount(mount: &Path, size_kib: u64) -> SmallDisk {
        use std::io::BufRead;
        std::fs::create_dir_all(mount).expect("mount point");
        let script = r#"mount -t tmpfs -o size="$1"k xsflow-test "$2" || exit 1
echo mounted
while read -r line; do (eval "$line"); echo "exit $?"; done"#;
        let mut shell = std::process::Command::new("unshare")
            .args(["--user", "--map-root-user", "--mount", "sh", "-c", script, "sh"])
            .arg(size_kib.to_string())
            .arg(mount)
            .current_dir(mount.parent().expect("a parent folder"))
            .env("SOURCE_DATE_EPOCH", "1764633600")
            .env_remove("RUST_LOG")
            .stdin(std::process::Stdio::piped())
            .stdout(std::process::Stdio::piped())
            .spawn()
            .expect("unshare (util-linux) runs");
        let input = shell.stdin.take().expect("stdin");
        let mut output = std::io::BufReader::new(shell.stdout.take().expect("stdout"));
        let mut line = String::new();
        output.read_line(&mut line).expect("the shell answers");
        assert_eq!(
            line.trim(),
            "mounted",
            "this test needs user and mount namespaces (unshare --user --map-root-user --mount) to mount a tmpfs"
        );
        SmallDisk { shell, input, output, mount: mount.to_path_buf() }
    }

    /// Run a shell line in the namespace; its exit code.
    fn sh(&mut self, line: &str) -> i32 {
        use std::io::{BufRead, Write};
        writeln!(self.input, "{line}").expect("send");
        let mut answer = String::new();
        self.output.read_line(&mut answer).expect("answer");
        answer.trim().strip_prefix("exit ").and_then(|c| c.parse().ok()).unwrap_or_else(|| panic!("{answer:?}"))
    }

    /// The small disk's folder as this process sees it.
    fn inside(&self) -> std::path::PathBuf {
        let root = Path::new("/proc").join(self.shell.id().to_string()).join("root");
        root.join(self.mount.strip_prefix("/").expect("absolute"))
    }

    /// The files on the small disk, with their bytes (the filler aside).
    fn files(&self) -> Vec<(String, Vec<u8>)> {
        let inside = self.inside();
        crate::common::files_below(&inside)
            .into_iter()
            .map(|f| {
                (
                    f.strip_prefix(&inside).expect("below").to_string_lossy().into_owned(),
                    std::fs::read(&f).expect("read"),
                )
            })
            .filter(|(name, _)| name != "filler")
            .collect()
    }
}

impl Drop for SmallDisk {
    fn drop(&mut self) {
        let _ = self.shell.kill();
        let _ = self.shell.wait();
    }
}

#[test]
fn a_full_disk_or_a_read_only_output_folder_stops_the_batch_with_a_clear_error_and_the_catalogue_unchanged() {
    let tmp = demo_copy();
    let dir = tmp.path().to_path_buf();
    let mut disk = SmallDisk::mount(&dir.join("out"), 2048);
    let xsflow_bin = env!("CARGO_BIN_EXE_xsflow");
    let batch_inside = |disk: &mut SmallDisk, log: &str| -> (i32, String) {
        let code = disk.sh(&format!("'{xsflow_bin}' batch experiment.yaml --out out > {log} 2>&1"));
        (code, std::fs::read_to_string(dir.join(log)).expect("log"))
    };
    let (code, log) = batch_inside(&mut disk, "first.log");
    assert_eq!(code, 0, "{log}");
    assert!(!dir.join("out/catalogue.sqlite").exists(), "the outputs are on the small disk, not the real one");
    let before = disk.files();
    assert!(before.iter().any(|(n, _)| n == "catalogue.sqlite") && before.len() > 10, "{}", before.len());

    // Run 0102 changes, then the disk fills up (dd stops at the tmpfs size, 2 MiB, well
    // before its 4 MiB count).
    edit(&dir.join("runs/run0102.yields.csv"), "D01,elastic,", "D01,elastic,1");
    assert_ne!(disk.sh("dd if=/dev/zero of=out/filler bs=4k count=1024 2>/dev/null"), 0, "dd must hit a full disk");
    let filler = std::fs::metadata(disk.inside().join("filler")).expect("the filler is on the small disk").len();
    assert!(filler > 0 && filler < 2 << 20, "{filler} bytes: the small disk is full");
    let (code, log) = batch_inside(&mut disk, "full.log");
    assert_eq!(code, 2, "{log}");
    assert!(log.contains("No space left on device"), "{log}");
    assert!(log.contains("the batch stopped: 0 run(s) written, 0 failed, 1 not processed"), "{log}");
    assert!(log.contains("help: free space on the disk or make the output folder writable"), "{log}");
    let after = disk.files();
    let names = |f: &[(String, Vec<u8>)]| f.iter().map(|x| x.0.clone()).collect::<Vec<_>>();
    assert_eq!(names(&after), names(&before), "no file added or left behind, no temporary file");
    for ((name, a), (_, b)) in after.iter().zip(&before) {
        assert!(a == b, "{name} changed on the full disk");
    }

    // Space again: the rerun takes up exactly the changed run and gives what a batch on the
    // real disk gives.
    assert_eq!(disk.sh("rm out/filler"), 0);
    let (code, log) = batch_inside(&mut disk, "rerun.log");
    assert_eq!(code, 0, "{log}");
    assert!(log.contains("batch: 1 ok, 0 failed, 3 skipped"), "{log}");
    let reference = xsflow(&dir, &["batch", "experiment.yaml", "--out", "out-ref"]);
    assert_eq!(reference.status.code(), Some(0), "{}", text(&reference));
    let on_disk = disk.files();
    for (name, bytes) in &on_disk {
        if name != "catalogue.sqlite" && !name.starts_with(REPORT) {
            let want = std::fs::read(dir.join("out-ref").join(name));
            assert!(want.is_ok_and(|w| w == *bytes), "{name} differs from an undisturbed batch");
        }
    }

    // A read-only output folder: a clear error before any run is read, nothing changes.
    edit(&dir.join("runs/run0103.yields.csv"), "D01,elastic,", "D01,elastic,1");
    assert_eq!(disk.sh("mount -o remount,ro out"), 0);
    let (code, log) = batch_inside(&mut disk, "readonly.log");
    assert_eq!(code, 2, "{log}");
    assert!(log.contains("cannot write into the output folder: Read-only file system"), "{log}");
    assert!(disk.files() == on_disk, "nothing changed in the read-only folder");
}

#[test]
fn an_output_folder_that_is_a_file_is_refused_before_any_run_is_read() {
    let tmp = demo_copy();
    std::fs::write(tmp.path().join("out"), "not a folder").expect("write");
    let out = batch(tmp.path(), &[]);
    let msg = text(&out);
    assert_eq!(out.status.code(), Some(2), "{msg}");
    assert!(msg.contains("out cannot create the output folder: File exists"), "{msg}");
    assert!(
        msg.contains("help: the output folder must exist or be creatable, be writable and have free space"),
        "{msg}"
    );
    assert_eq!(std::fs::read_to_string(tmp.path().join("out")).expect("read"), "not a folder");
}
