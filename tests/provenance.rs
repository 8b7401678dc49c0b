//! Provenance (issue 11): every table output records what it was made from, the combined
//! distribution included, read back with an independent reader (pyarrow); an input that
//! cannot be read is an error naming it, never a hash of nothing or a run left out unsaid.

use std::path::Path;

use crate::common::{demo_copy, demo_dir, files_below, text, xsflow};

/// The key-value metadata of a Parquet file as pyarrow reads it.
fn pyarrow_metadata(path: &Path) -> serde_json::Map<String, serde_json::Value> {
    let script = "import json, sys\n\
                  import pyarrow.parquet as pq\n\
                  meta = pq.read_metadata(sys.argv[1]).metadata or {}\n\
                  print(json.dumps({k.decode(): v.decode() for k, v in meta.items()}))";
    let out = std::process::Command::new("python3")
        .args(["-c", script])
        .arg(path)
        .output()
        .expect("python3 runs (python3 -m pip install -r tests/reference/requirements.txt)");
    assert!(out.status.success(), "pyarrow cannot read {}: {}", path.display(), String::from_utf8_lossy(&out.stderr));
    serde_json::from_slice(&out.stdout).expect("JSON")
}

/// The provenance record in a Parquet file's metadata, as pyarrow reads it.
fn parquet_provenance(path: &Path) -> serde_json::Value {
    let meta = pyarrow_metadata(path);
    let record = meta.get("xsflow.provenance").and_then(|v| v.as_str());
    let record = record.unwrap_or_else(|| panic!("{} has no xsflow.provenance entry: {meta:?}", path.display()));
    serde_json::from_str(record).expect("the record is JSON")
}

fn read_json(path: &Path) -> serde_json::Value {
    let text = std::fs::read_to_string(path).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    serde_json::from_str(&text).expect("JSON")
}

fn sha256_of(path: &Path) -> String {
    xsflow::provenance::sha256_hex(&std::fs::read(path).unwrap_or_else(|e| panic!("{}: {e}", path.display())))
}

/// The run ids a combined record lists.
fn runs_of(record: &serde_json::Value) -> Vec<String> {
    let runs = record["runs"].as_array().unwrap_or_else(|| panic!("no runs in {record}"));
    runs.iter().map(|r| r["run"].as_str().expect("run id").to_string()).collect()
}

#[test]
fn issue_11_the_combined_distribution_records_the_config_and_every_run_read_back_with_pyarrow() {
    let tmp = demo_copy();
    let out = xsflow(tmp.path(), &["reduce", "experiment.yaml", "--out", "out"]);
    assert_eq!(out.status.code(), Some(0), "{}", text(&out));
    let dir = tmp.path().join("out");
    let record = parquet_provenance(&dir.join("angular_distribution.parquet"));
    assert_eq!(record, read_json(&dir.join("angular_distribution_provenance.json")), "the same record beside it");
    assert_eq!(record["program"], "xsflow");
    assert_eq!(record["version"], env!("CARGO_PKG_VERSION"));
    assert_eq!(record["config_sha256"], sha256_of(&tmp.path().join("experiment.yaml")));
    assert_eq!(record["created_utc"], "2025-12-02T00:00:00Z", "SOURCE_DATE_EPOCH is honoured");
    assert_eq!(runs_of(&record), ["0101", "0102", "0103", "0104"]);
    for run in record["runs"].as_array().expect("runs") {
        let id = run["run"].as_str().expect("id");
        let inputs = run["inputs"].as_array().expect("inputs");
        let paths: Vec<&str> = inputs.iter().map(|i| i["path"].as_str().expect("path")).collect();
        assert_eq!(paths, [format!("runs/run{id}.run.yaml"), format!("runs/run{id}.yields.csv")], "{run}");
        for input in inputs {
            let path = tmp.path().join(input["path"].as_str().expect("path"));
            assert_eq!(input["sha256"], sha256_of(&path), "{}", path.display());
        }
        // The same inputs as the run's own record.
        assert_eq!(run["inputs"], read_json(&dir.join(id).join("provenance.json"))["inputs"], "{id}");
    }
    // Every Parquet table carries its record, and the same record stands in a file beside
    // it (for the CSV copies and the covariance, which have no metadata).
    let parquets: Vec<_> =
        files_below(&dir).into_iter().filter(|p| p.extension().is_some_and(|e| e == "parquet")).collect();
    assert_eq!(parquets.len(), 7, "four runs, the distribution, two fit curves: {parquets:?}");
    for p in parquets {
        let folder = p.parent().expect("a folder");
        let beside = if folder == dir { "angular_distribution_provenance.json" } else { "provenance.json" };
        assert_eq!(parquet_provenance(&p), read_json(&folder.join(beside)), "{}", p.display());
    }
}

#[test]
fn issue_11_the_committed_expected_distributions_carry_their_provenance() {
    for (expected, runs) in
        [("expected", ["0101", "0102", "0103", "0104"].as_slice()), ("expected-listmode", &["0201", "0202", "0203"])]
    {
        let dir = demo_dir().join(expected);
        let record = parquet_provenance(&dir.join("angular_distribution.parquet"));
        assert_eq!(runs_of(&record), runs, "{expected}");
        assert_eq!(record, read_json(&dir.join("angular_distribution_provenance.json")), "{expected}");
    }
}

#[test]
fn issue_11_a_batch_run_whose_outputs_cannot_be_read_back_fails_and_the_others_are_combined() {
    let tmp = demo_copy();
    let batch = || xsflow(tmp.path(), &["batch", "experiment.yaml", "--out", "out"]);
    let summary =
        |o: &std::process::Output| text(o).lines().find(|l| l.starts_with("batch:")).unwrap_or_default().to_string();
    let first = batch();
    assert_eq!(first.status.code(), Some(0), "{}", text(&first));
    // Run 0102's record goes missing from the output folder; run 0101 changes, so the
    // combination is redone and must read 0102's inputs back.
    let lost = tmp.path().join("out/0102/provenance.json");
    std::fs::remove_file(&lost).expect("remove");
    let record_0101 = tmp.path().join("runs/run0101.run.yaml");
    let mut bytes = std::fs::read(&record_0101).expect("read");
    bytes.extend_from_slice(b"# read again\n");
    std::fs::write(&record_0101, bytes).expect("write");
    let second = batch();
    let msg = text(&second);
    assert_eq!(second.status.code(), Some(1), "a run failed: {msg}");
    // Issue 11: 0102 was counted twice, skipped and failed ("1 ok, 1 failed, 3 skipped" of
    // four runs); it is one failed run.
    assert!(summary(&second).starts_with("batch: 1 ok, 1 failed, 2 skipped"), "{msg}");
    assert!(
        msg.contains("out/0102/provenance.json cannot read the run's provenance record: No such file or directory"),
        "names the file and the OS error: {msg}"
    );
    let combined = read_json(&tmp.path().join("out/angular_distribution_provenance.json"));
    assert_eq!(runs_of(&combined), ["0101", "0103", "0104"], "0102 is left out, and says so");
    let fit = read_json(&tmp.path().join("out/fits/elastic_optical/provenance.json"));
    assert!(!fit["inputs"].to_string().contains("run0102"), "{fit}");
    // The catalogue says 0102 failed, and the next batch reduces it again.
    let failed: serde_json::Value =
        serde_json::from_slice(&xsflow(tmp.path(), &["runs", "out", "--failed", "--format", "json"]).stdout)
            .expect("json");
    assert_eq!(
        failed.as_array().map(|a| a.iter().map(|r| r["run"].clone()).collect::<Vec<_>>()),
        Some(vec!["0102".into()])
    );
    let third = batch();
    assert_eq!(third.status.code(), Some(0), "{}", text(&third));
    assert!(summary(&third).starts_with("batch: 1 ok, 0 failed, 3 skipped"), "{}", text(&third));
    let combined = read_json(&tmp.path().join("out/angular_distribution_provenance.json"));
    assert_eq!(runs_of(&combined), ["0101", "0102", "0103", "0104"]);
}

#[test]
fn issue_11_a_fit_data_file_that_cannot_be_read_is_an_error_naming_it_not_a_hash_of_nothing() {
    // A folder in place of the file, and a link to a file removed after the fit read it:
    // neither can be hashed, whoever runs the test (root reads a file of mode 000).
    let loaded = xsflow::fit::load(&demo_dir().join("fits/elastic-rutherford.yaml"), None).expect("the demo fit loads");
    let tmp = tempfile::tempdir().expect("scratch");
    let folder = tmp.path().join("0101/cross_sections.parquet");
    std::fs::create_dir_all(&folder).expect("folder");
    let gone = tmp.path().join("0102/cross_sections.parquet");
    std::fs::create_dir_all(gone.parent().expect("parent")).expect("folder");
    std::os::unix::fs::symlink(tmp.path().join("removed.parquet"), &gone).expect("link");
    for (path, os_error) in [(&folder, "Is a directory"), (&gone, "No such file or directory")] {
        let err = xsflow::fit::provenance_json(&loaded, std::slice::from_ref(path), tmp.path())
            .expect_err("an unreadable data file is an error");
        let msg = err.to_string();
        assert!(msg.starts_with(&path.display().to_string()), "names the file: {msg}");
        assert!(
            msg.contains(&format!("cannot read the data file to hash it for the fit's provenance: {os_error}")),
            "{msg}"
        );
    }
}

#[test]
fn issue_11_a_fit_records_the_hash_of_its_fit_file_and_of_the_experiment_config_read_back_with_pyarrow() {
    let tmp = demo_copy();
    let out = xsflow(tmp.path(), &["reduce", "experiment.yaml", "--out", "out"]);
    assert_eq!(out.status.code(), Some(0), "{}", text(&out));
    // (fit folder, its fit file)
    let cases =
        [("elastic_optical", "fits/elastic-optical.yaml"), ("inelastic_legendre", "fits/inelastic-legendre.yaml")];
    for (name, fit_file) in cases {
        let dir = tmp.path().join("out/fits").join(name);
        let record = parquet_provenance(&dir.join("curve.parquet"));
        assert_eq!(record, read_json(&dir.join("provenance.json")), "{name}: the same record beside it");
        assert_eq!(record["config_file"], "experiment.yaml", "{name}");
        assert_eq!(record["config_sha256"], sha256_of(&tmp.path().join("experiment.yaml")), "{name}");
        assert_eq!(record["fit_file"], fit_file, "{name}");
        assert_eq!(record["fit_sha256"], sha256_of(&tmp.path().join(fit_file)), "{name}");
    }
    // The same hash as the runs' own records carry.
    let run = read_json(&tmp.path().join("out/0101/provenance.json"));
    let fit = read_json(&tmp.path().join("out/fits/elastic_optical/provenance.json"));
    assert_eq!(fit["config_sha256"], run["config_sha256"]);
    // `xsflow fit` reads no experiment config: the keys are there, and null.
    let out =
        xsflow(tmp.path(), &["fit", "out", "fits/elastic-rutherford.yaml", "--state", "elastic", "--out", "alone"]);
    assert_eq!(out.status.code(), Some(0), "{}", text(&out));
    let record = parquet_provenance(&tmp.path().join("alone/curve.parquet"));
    assert_eq!(record["config_file"], serde_json::Value::Null, "{record}");
    assert_eq!(record["config_sha256"], serde_json::Value::Null, "{record}");
    assert_eq!(record["fit_sha256"], sha256_of(&tmp.path().join("fits/elastic-rutherford.yaml")));
}
